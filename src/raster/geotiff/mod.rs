//! Multi-band TIFF / GeoTIFF rasters: reading block by block into `f32`, and writing single-band
//! GeoTIFFs strip by strip with the source's georeferencing copied unchanged.
//!
//! Reading goes through the `tiff` crate one strip (or one row of tiles) at a time, so memory
//! stays bounded by one block however large the raster is. Every size is checked against the
//! [`Limits`](crate::limits::Limits) before any pixel buffer is allocated. Other image formats
//! (PNG, JPEG, …) open through [`crate::raster::decode`] as a single RGB block without
//! georeferencing.
//!
//! The parts: `tags` (GeoTIFF tags and keys), `types` (raster description and blocks), `decoder`
//! (shared `tiff` decoder plumbing), `open` (opening and checking a file), `blocks`
//! (reading one block) and `write` (writing GeoTIFFs).

mod blocks;
mod decoder;
mod open;
mod tags;
mod types;
mod write;

pub use open::{GeoRaster, MAX_BANDS};
pub use tags::{
    parse_nodata, read_geotags, GeoTagValue, GeoTags, TAG_GDAL_NODATA, TAG_GEO_ASCII_PARAMS,
    TAG_GEO_DOUBLE_PARAMS, TAG_GEO_KEY_DIRECTORY, TAG_MODEL_PIXEL_SCALE, TAG_MODEL_TIEPOINT,
    TAG_MODEL_TRANSFORMATION,
};
pub use types::{Block, RasterInfo, SampleKind};
pub use write::{write_f32_band, write_u8_band};

#[cfg(test)]
mod tests;
