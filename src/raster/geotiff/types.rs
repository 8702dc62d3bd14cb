//! What is known about a raster (sample type, bands, layout, georeferencing, no-data) and the
//! blocks it is read in.

use super::tags::GeoTags;

/// Sample type of the source.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum SampleKind {
    /// Unsigned 8-bit integer.
    U8,
    /// Unsigned 16-bit integer.
    U16,
    /// Signed 16-bit integer.
    I16,
    /// Unsigned 32-bit integer (values above 2^24 lose precision as `f32`).
    U32,
    /// Signed 32-bit integer (magnitudes above 2^24 lose precision as `f32`).
    I32,
    /// 32-bit IEEE float.
    F32,
    /// 64-bit IEEE float (read as `f32`: rounded, large values become ±infinity).
    F64,
}

impl SampleKind {
    /// Size of one stored sample, in bytes.
    pub fn bytes(self) -> u32 {
        match self {
            SampleKind::U8 => 1,
            SampleKind::U16 | SampleKind::I16 => 2,
            SampleKind::U32 | SampleKind::I32 | SampleKind::F32 => 4,
            SampleKind::F64 => 8,
        }
    }

    /// Short lower-case name (`"u8"`, `"u16"`, `"i16"`, `"u32"`, `"i32"`, `"f32"`, `"f64"`).
    pub fn name(self) -> &'static str {
        match self {
            SampleKind::U8 => "u8",
            SampleKind::U16 => "u16",
            SampleKind::I16 => "i16",
            SampleKind::U32 => "u32",
            SampleKind::I32 => "i32",
            SampleKind::F32 => "f32",
            SampleKind::F64 => "f64",
        }
    }

    /// From the TIFF SampleFormat code (1 unsigned, 2 signed, 3 float) and bits per sample.
    pub(super) fn from_tiff(format: u16, bits: u8) -> Option<SampleKind> {
        Some(match (format, bits) {
            (1, 8) => SampleKind::U8,
            (1, 16) => SampleKind::U16,
            (2, 16) => SampleKind::I16,
            (1, 32) => SampleKind::U32,
            (2, 32) => SampleKind::I32,
            (3, 32) => SampleKind::F32,
            (3, 64) => SampleKind::F64,
            _ => return None,
        })
    }
}

/// What is known about a raster before reading its pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct RasterInfo {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels (rows).
    pub height: u32,
    /// Number of bands (samples per pixel, an alpha sample not counted), 1–256.
    pub bands: usize,
    /// Stored sample type (every block is converted to `f32`).
    pub sample: SampleKind,
    /// True when the file stores each band separately (TIFF PlanarConfiguration 2).
    pub planar: bool,
    /// True when the file is stored in tiles rather than strips.
    pub tiled: bool,
    /// GeoTIFF tags as read (empty for non-TIFF inputs and plain TIFFs).
    pub geo: GeoTags,
    /// No-data value from GDAL_NODATA (tag 42113), in sample units; may be NaN.
    pub nodata: Option<f64>,
    /// The stored sample (1-based) that is alpha (TIFF ExtraSamples 1 or 2): it is not one of
    /// the `bands`, and where it is 0 the pixel holds no data.
    pub alpha_band: Option<usize>,
    /// Where a GDAL mask was found (`"internal"`, or the name of the `.msk` file beside the
    /// raster); pixels it marks 0 hold no data.
    pub mask: Option<String>,
    /// Strips or tiles left out of the file (offset or byte count 0), read as no data.
    pub sparse_chunks: usize,
    /// A raster on the same grid whose non-zero pixels are left out (see
    /// `GeoRaster::exclude_where`).
    pub excluded_by: Option<std::path::PathBuf>,
    /// Per band (alpha left out): physical value = stored × scale + offset, from
    /// GDAL_METADATA ((1, 0) when not given). No-data values compare with stored values.
    pub scale_offset: Vec<(f64, f64)>,
    /// Per band (alpha left out): the band's description from GDAL_METADATA.
    pub descriptions: Vec<Option<String>>,
}

impl RasterInfo {
    /// True when `value` (a sample as read into a [`Block`]) is the no-data value. A NaN
    /// no-data value matches NaN samples.
    pub fn is_nodata(&self, value: f32) -> bool {
        match self.nodata {
            Some(n) if n.is_nan() => value.is_nan(),
            Some(n) => value == n as f32,
            None => false,
        }
    }
}

/// A block of full-width rows, pixel-interleaved `f32`: `data[(row * width + x) * bands + band]`,
/// covering rows `y0 .. y0 + rows` of the image.
#[derive(Debug, Clone, PartialEq)]
pub struct Block {
    /// First image row of the block (0 = top).
    pub y0: u32,
    /// Number of rows in the block.
    pub rows: u32,
    /// `rows × width × bands` samples.
    pub data: Vec<f32>,
}
