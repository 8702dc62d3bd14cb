//! Multi-band TIFF / GeoTIFF rasters: reading block by block into `f32`, and writing single-band
//! GeoTIFFs (strip by strip, or as tiles with overviews) with the source's georeferencing
//! copied unchanged.
//!
//! Reading goes through the `tiff` crate one strip (or one row of tiles) at a time, so memory
//! stays bounded by one block however large the raster is. Every size is checked against the
//! [`Limits`](crate::limits::Limits) before any pixel buffer is allocated. Other image formats
//! (PNG, JPEG, …) open through [`crate::raster::decode`] as a single RGB block without
//! georeferencing.
//!
//! The parts: `tags` (GeoTIFF tags and keys), `types` (raster description and blocks), `decoder`
//! (shared `tiff` decoder plumbing), `open` (opening and checking a file), `blocks`
//! (reading one block), `mask` (GDAL masks and the reading of their chunks), `metadata`
//! (GDAL_METADATA: scale, offset, descriptions), `ellipsoid`, `crs`, `tm` and `area` (the CRS
//! from the GeoKeys, pixel corners to longitude/latitude, ground areas), `write`,
//! `write_common` and `write_deflate` (writing GeoTIFFs in strips), and `cog`, `tiles` and
//! `ifd` (writing them as tiles with overviews, laid out as Cloud-Optimized GeoTIFF).

mod area;
mod blocks;
mod cog;
mod crs;
mod decoder;
mod ellipsoid;
mod ifd;
mod mask;
mod metadata;
mod open;
mod stack;
mod tags;
mod tiles;
mod tm;
mod types;
mod write;
mod write_common;
mod write_deflate;

pub use area::{footprint_area, AreaMethod, PixelAreas, LATTICE_STEP};
pub use cog::{
    cog_levels, cog_size_bound, memory_scratch, write_f32_cog, write_u8_cog, CogBand, Scratch,
    ScratchSource,
};
pub use crs::{geo_key_double, is_equal_area_epsg, Crs, GridCrs, PixelToModel};
pub use ellipsoid::{ellipsoid_by_code, ellipsoid_of_crs, Ellipsoid};
pub use metadata::{parse_gdal_metadata, BandMetadata, TAG_GDAL_METADATA};
pub use open::{GeoRaster, MAX_BANDS};
pub use tags::{
    parse_nodata, read_geotags, GeoTagValue, GeoTags, TAG_GDAL_NODATA, TAG_GEO_ASCII_PARAMS,
    TAG_GEO_DOUBLE_PARAMS, TAG_GEO_KEY_DIRECTORY, TAG_MODEL_PIXEL_SCALE, TAG_MODEL_TIEPOINT,
    TAG_MODEL_TRANSFORMATION,
};
pub use tiles::TILE;
pub use tm::TransverseMercator;
pub use types::{Block, RasterInfo, SampleKind};
pub use write::{write_f32_band, write_f32_band_with, write_u8_band, write_u8_band_with};
pub use write_common::{bigtiff_needed, WriteOptions, BIGTIFF_ABOVE, OUTPUT_NAME};

#[cfg(test)]
mod tests;

#[cfg(test)]
mod crs_tests;

#[cfg(test)]
mod gdal_tests;

#[cfg(test)]
mod cog_tests;

/// The layout checks the integration tests use, shared with the unit tests.
#[cfg(test)]
#[path = "../../../tests/support/cog.rs"]
mod cog_layout;
