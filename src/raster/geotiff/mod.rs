//! Multi-band TIFF / GeoTIFF rasters: reading block by block into `f32`, and writing single-band
//! GeoTIFFs strip by strip with the source's georeferencing copied unchanged.
//!
//! Reading goes through the `tiff` crate one strip (or one row of tiles) at a time, so memory
//! stays bounded by one block however large the raster is. Every size is checked against the
//! [`Limits`] before any pixel buffer is allocated. Other image formats (PNG, JPEG, …) open
//! through [`crate::raster::decode`] as a single RGB block without georeferencing.

use crate::error::{Error, Result};
use crate::limits::Limits;
use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use tiff::decoder::ifd::Value;
use tiff::decoder::{ChunkType, Decoder, DecodingResult};
use tiff::encoder::colortype;
use tiff::encoder::TiffEncoder;
use tiff::tags::{Tag, Type};
use tiff::{ColorType, TiffError};

/// ModelPixelScaleTag (DOUBLE × 3): pixel size in CRS units along x, y, z.
pub const TAG_MODEL_PIXEL_SCALE: u16 = 33550;
/// ModelTiepointTag (DOUBLE × 6n): raster (i, j, k) ↔ model (x, y, z) point pairs.
pub const TAG_MODEL_TIEPOINT: u16 = 33922;
/// ModelTransformationTag (DOUBLE × 16): row-major 4 × 4 raster-to-model matrix.
pub const TAG_MODEL_TRANSFORMATION: u16 = 34264;
/// GeoKeyDirectoryTag (SHORT × 4(n+1)): the GeoKey header and entries.
pub const TAG_GEO_KEY_DIRECTORY: u16 = 34735;
/// GeoDoubleParamsTag (DOUBLE): values of DOUBLE GeoKeys.
pub const TAG_GEO_DOUBLE_PARAMS: u16 = 34736;
/// GeoAsciiParamsTag (ASCII): values of ASCII GeoKeys, each ended by `|`.
pub const TAG_GEO_ASCII_PARAMS: u16 = 34737;
/// GDAL_NODATA (ASCII): the no-data value of every band, as text.
pub const TAG_GDAL_NODATA: u16 = 42113;

/// Largest number of bands accepted from a TIFF.
pub const MAX_BANDS: usize = 16;

/// Target size of one written strip, in bytes (the writer holds one strip at a time).
const STRIP_TARGET_BYTES: u64 = 256 * 1024;

/// Name used in error messages about the output of the writers (which see only a stream).
const OUTPUT_NAME: &str = "GeoTIFF output";

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
    fn from_tiff(format: u16, bits: u8) -> Option<SampleKind> {
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

/// The value of one GeoTIFF tag exactly as stored: the TIFF field type and its values.
///
/// Equality compares the type and the values; floating-point values compare by bit pattern, so
/// a NaN equals the same NaN and `0.0` differs from `-0.0`.
#[derive(Debug, Clone)]
pub enum GeoTagValue {
    /// TIFF SHORT (16-bit unsigned).
    Short(Vec<u16>),
    /// TIFF LONG (32-bit unsigned).
    Long(Vec<u32>),
    /// TIFF FLOAT (32-bit IEEE).
    Float(Vec<f32>),
    /// TIFF DOUBLE (64-bit IEEE).
    Double(Vec<f64>),
    /// TIFF ASCII, without the terminating NUL.
    Ascii(String),
}

impl PartialEq for GeoTagValue {
    fn eq(&self, other: &Self) -> bool {
        use GeoTagValue as V;
        match (self, other) {
            (V::Short(a), V::Short(b)) => a == b,
            (V::Long(a), V::Long(b)) => a == b,
            (V::Float(a), V::Float(b)) => {
                a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
            }
            (V::Double(a), V::Double(b)) => {
                a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
            }
            (V::Ascii(a), V::Ascii(b)) => a == b,
            _ => false,
        }
    }
}

impl GeoTagValue {
    /// The TIFF type name (`"SHORT"`, `"LONG"`, `"FLOAT"`, `"DOUBLE"`, `"ASCII"`).
    pub fn type_name(&self) -> &'static str {
        match self {
            GeoTagValue::Short(_) => "SHORT",
            GeoTagValue::Long(_) => "LONG",
            GeoTagValue::Float(_) => "FLOAT",
            GeoTagValue::Double(_) => "DOUBLE",
            GeoTagValue::Ascii(_) => "ASCII",
        }
    }

    /// Floating-point values (FLOAT or DOUBLE) as `f64`; `None` for other types.
    fn reals(&self) -> Option<Vec<f64>> {
        match self {
            GeoTagValue::Float(v) => Some(v.iter().map(|&x| x as f64).collect()),
            GeoTagValue::Double(v) => Some(v.clone()),
            _ => None,
        }
    }

    /// Integer values (SHORT, or LONG that fit 16 bits); `None` otherwise.
    fn shorts(&self) -> Option<Vec<u16>> {
        match self {
            GeoTagValue::Short(v) => Some(v.clone()),
            GeoTagValue::Long(v) => v.iter().map(|&x| u16::try_from(x).ok()).collect(),
            _ => None,
        }
    }
}

/// GeoTIFF tags copied verbatim from the input (OGC GeoTIFF 1.1): ModelPixelScale 33550,
/// ModelTiepoint 33922, ModelTransformation 34264, GeoKeyDirectory 34735, GeoDoubleParams 34736,
/// GeoAsciiParams 34737. `None` where the file has no such tag.
///
/// Equality means the same tags are present with the same TIFF types and the same values.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GeoTags {
    /// ModelPixelScaleTag (33550): pixel size (x, y, z) in CRS units.
    pub pixel_scale: Option<GeoTagValue>,
    /// ModelTiepointTag (33922): (i, j, k, x, y, z) tuples.
    pub tiepoint: Option<GeoTagValue>,
    /// ModelTransformationTag (34264): 16 values, row-major 4 × 4 matrix.
    pub transformation: Option<GeoTagValue>,
    /// GeoKeyDirectoryTag (34735).
    pub key_directory: Option<GeoTagValue>,
    /// GeoDoubleParamsTag (34736).
    pub double_params: Option<GeoTagValue>,
    /// GeoAsciiParamsTag (34737).
    pub ascii_params: Option<GeoTagValue>,
}

/// GeoKey ids used here.
const KEY_MODEL_TYPE: u16 = 1024;
const KEY_PROJECTED_CS: u16 = 3072;
const KEY_PROJ_LINEAR_UNITS: u16 = 3076;
/// EPSG unit code of the metre.
const EPSG_METRE: u16 = 9001;

fn is_utm_epsg(code: u16) -> bool {
    (32601..=32660).contains(&code) || (32701..=32760).contains(&code)
}

impl GeoTags {
    /// True when none of the six GeoTIFF tags is present.
    pub fn is_empty(&self) -> bool {
        self.slots().iter().all(|(_, v)| v.is_none())
    }

    /// The tags present, as (TIFF tag number, value), in ascending tag order.
    pub fn entries(&self) -> Vec<(u16, &GeoTagValue)> {
        self.slots()
            .into_iter()
            .filter_map(|(code, v)| v.map(|v| (code, v)))
            .collect()
    }

    fn slots(&self) -> [(u16, Option<&GeoTagValue>); 6] {
        [
            (TAG_MODEL_PIXEL_SCALE, self.pixel_scale.as_ref()),
            (TAG_MODEL_TIEPOINT, self.tiepoint.as_ref()),
            (TAG_MODEL_TRANSFORMATION, self.transformation.as_ref()),
            (TAG_GEO_KEY_DIRECTORY, self.key_directory.as_ref()),
            (TAG_GEO_DOUBLE_PARAMS, self.double_params.as_ref()),
            (TAG_GEO_ASCII_PARAMS, self.ascii_params.as_ref()),
        ]
    }

    fn slot_mut(&mut self, code: u16) -> Option<&mut Option<GeoTagValue>> {
        Some(match code {
            TAG_MODEL_PIXEL_SCALE => &mut self.pixel_scale,
            TAG_MODEL_TIEPOINT => &mut self.tiepoint,
            TAG_MODEL_TRANSFORMATION => &mut self.transformation,
            TAG_GEO_KEY_DIRECTORY => &mut self.key_directory,
            TAG_GEO_DOUBLE_PARAMS => &mut self.double_params,
            TAG_GEO_ASCII_PARAMS => &mut self.ascii_params,
            _ => return None,
        })
    }

    /// The value of a SHORT GeoKey (stored in the directory itself), e.g. `geo_key(1024)` for
    /// GTModelTypeGeoKey. `None` when the key is absent, stored elsewhere, or the directory is
    /// malformed.
    pub fn geo_key(&self, id: u16) -> Option<u16> {
        let dir = self.key_directory.as_ref()?.shorts()?;
        let n = *dir.get(3)? as usize;
        for e in 0..n {
            let entry = dir.get(4 + 4 * e..8 + 4 * e)?;
            if entry[0] != id {
                continue;
            }
            let (location, count, value) = (entry[1], entry[2], entry[3]);
            return match location {
                0 => Some(value),
                TAG_GEO_KEY_DIRECTORY if count == 1 => dir.get(value as usize).copied(),
                _ => None,
            };
        }
        None
    }

    /// Area of one pixel in square metres when the CRS is projected with metre units
    /// (GTModelTypeGeoKey 1024 = 1 and ProjLinearUnitsGeoKey 3076 = 9001, or a
    /// ProjectedCSTypeGeoKey 3072 in the EPSG UTM ranges 32601–32660 / 32701–32760 with no
    /// linear-units key); from ModelPixelScale (sx·sy) or |det| of the 2×2 part of
    /// ModelTransformation. `None` otherwise (geographic CRS, unknown units, no georeferencing,
    /// or values that are not finite and positive).
    pub fn pixel_area_m2(&self) -> Option<f64> {
        let model = self.geo_key(KEY_MODEL_TYPE);
        let units = self.geo_key(KEY_PROJ_LINEAR_UNITS);
        let utm = self.geo_key(KEY_PROJECTED_CS).is_some_and(is_utm_epsg);
        let projected = model == Some(1) || (model.is_none() && utm);
        let metres = units == Some(EPSG_METRE) || (units.is_none() && utm);
        if !(projected && metres) {
            return None;
        }
        let area = if let Some(scale) = &self.pixel_scale {
            let s = scale.reals()?;
            let (sx, sy) = (*s.first()?, *s.get(1)?);
            if !(sx.is_finite() && sy.is_finite() && sx > 0.0 && sy > 0.0) {
                return None;
            }
            sx * sy
        } else {
            let m = self.transformation.as_ref()?.reals()?;
            if m.len() != 16 {
                return None;
            }
            (m[0] * m[5] - m[1] * m[4]).abs()
        };
        (area.is_finite() && area > 0.0).then_some(area)
    }

    /// Checks consistency: pixel scale values finite and > 0 (x, y), tiepoints a multiple of 6
    /// finite values, transformation 16 finite values with a non-zero determinant (of its 2×2
    /// part), GeoKeyDirectory header sane (version 1, count matches length, every key's value
    /// inside the tag it points to), not both ModelPixelScale+ModelTiepoint AND
    /// ModelTransformation, and each tag of a TIFF type the standard allows. `Err(message)`
    /// names the first problem found.
    pub fn validate(&self) -> std::result::Result<(), String> {
        let reals = |name: &str, v: &GeoTagValue| {
            v.reals().ok_or_else(|| {
                format!(
                    "{name} has TIFF type {}, expected DOUBLE (or FLOAT)",
                    v.type_name()
                )
            })
        };
        if let Some(v) = &self.pixel_scale {
            let s = reals("ModelPixelScale", v)?;
            if !(2..=3).contains(&s.len()) {
                return Err(format!(
                    "ModelPixelScale has {} values, expected 3",
                    s.len()
                ));
            }
            if let Some(bad) = s.iter().find(|x| !x.is_finite()) {
                return Err(format!("ModelPixelScale holds a non-finite value ({bad})"));
            }
            if s[0] <= 0.0 || s[1] <= 0.0 {
                return Err(format!(
                    "ModelPixelScale x and y must be > 0 (got {} and {})",
                    s[0], s[1]
                ));
            }
        }
        if let Some(v) = &self.tiepoint {
            let t = reals("ModelTiepoint", v)?;
            if t.is_empty() || t.len() % 6 != 0 {
                return Err(format!(
                    "ModelTiepoint has {} values, expected a non-zero multiple of 6",
                    t.len()
                ));
            }
            if let Some(bad) = t.iter().find(|x| !x.is_finite()) {
                return Err(format!("ModelTiepoint holds a non-finite value ({bad})"));
            }
        }
        if let Some(v) = &self.transformation {
            let m = reals("ModelTransformation", v)?;
            if m.len() != 16 {
                return Err(format!(
                    "ModelTransformation has {} values, expected 16",
                    m.len()
                ));
            }
            if let Some(bad) = m.iter().find(|x| !x.is_finite()) {
                return Err(format!(
                    "ModelTransformation holds a non-finite value ({bad})"
                ));
            }
            let det = m[0] * m[5] - m[1] * m[4];
            if det == 0.0 || !det.is_finite() {
                return Err(
                    "ModelTransformation is singular (its 2x2 part has determinant 0)".into(),
                );
            }
        }
        if self.transformation.is_some() && (self.pixel_scale.is_some() || self.tiepoint.is_some())
        {
            return Err(
                "both ModelTransformation and ModelPixelScale/ModelTiepoint are present; \
                 the georeferencing is ambiguous"
                    .into(),
            );
        }
        if let Some(v) = &self.double_params {
            reals("GeoDoubleParams", v)?;
        }
        let ascii_len = match &self.ascii_params {
            None => None,
            Some(GeoTagValue::Ascii(s)) => Some(s.len()),
            Some(v) => {
                return Err(format!(
                    "GeoAsciiParams has TIFF type {}, expected ASCII",
                    v.type_name()
                ))
            }
        };
        if let Some(v) = &self.key_directory {
            let dir = v.shorts().ok_or_else(|| {
                format!(
                    "GeoKeyDirectory has TIFF type {} (or values over 65535), expected SHORT",
                    v.type_name()
                )
            })?;
            if dir.len() < 4 {
                return Err(format!(
                    "GeoKeyDirectory has {} values, fewer than its 4-value header",
                    dir.len()
                ));
            }
            if dir[0] != 1 {
                return Err(format!("GeoKeyDirectory version is {}, expected 1", dir[0]));
            }
            let n = dir[3] as usize;
            if dir.len() != 4 + 4 * n {
                return Err(format!(
                    "GeoKeyDirectory declares {n} keys ({} values) but holds {} values",
                    4 + 4 * n,
                    dir.len()
                ));
            }
            let doubles = self
                .double_params
                .as_ref()
                .and_then(|d| d.reals())
                .map(|d| d.len());
            for entry in dir[4..].chunks_exact(4) {
                let (id, location, count, offset) = (entry[0], entry[1], entry[2], entry[3]);
                let end = offset as usize + count as usize;
                let fits = match location {
                    0 => count == 1,
                    TAG_GEO_KEY_DIRECTORY => end <= dir.len(),
                    TAG_GEO_DOUBLE_PARAMS => doubles.is_some_and(|len| end <= len),
                    // The count of an ASCII key includes its `|`; tolerate a counted NUL.
                    TAG_GEO_ASCII_PARAMS => ascii_len.is_some_and(|len| end <= len + 1),
                    _ => {
                        return Err(format!(
                            "GeoKey {id} points to tag {location}, which is not a GeoTIFF tag"
                        ))
                    }
                };
                if !fits {
                    return Err(format!(
                        "GeoKey {id} (location {location}, count {count}, offset {offset}) \
                         points outside its values"
                    ));
                }
            }
        }
        Ok(())
    }
}

/// What is known about a raster before reading its pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct RasterInfo {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels (rows).
    pub height: u32,
    /// Number of bands (samples per pixel), 1–16.
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

/// An open raster, read one block at a time.
pub struct GeoRaster {
    path: PathBuf,
    info: RasterInfo,
    source: Source,
}

impl std::fmt::Debug for GeoRaster {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("GeoRaster")
            .field("path", &self.path)
            .field("info", &self.info)
            .field("blocks", &self.block_count())
            .finish()
    }
}

enum Source {
    Tiff(Box<TiffSource>),
    Image(crate::raster::Decoded),
}

struct TiffSource {
    decoder: Decoder<PatchedReader<BufReader<File>>>,
    /// Width of a strip (the image width) or of a tile, in pixels.
    chunk_w: u32,
    /// Rows per block: rows per strip (at most the height) or the tile height.
    chunk_h: u32,
    /// Chunks across one block (1 for strips).
    across: u32,
    /// Number of blocks.
    down: u32,
    /// Set after the decoder failed in a way that may leave it unusable.
    poisoned: bool,
}

impl GeoRaster {
    /// Opens a TIFF/GeoTIFF (1–16 bands; u8/u16/i16/u32/i32/f32/f64; chunky or planar; strips or
    /// tiles; uncompressed, LZW, Deflate, PackBits — whatever the `tiff` crate decodes). Other
    /// formats (PNG, JPEG, …) open through the `image` crate as RGB (3 bands, u8 or u16) with
    /// empty GeoTags and one block.
    ///
    /// Checks width × height against `limits.max_pixels`, and the largest buffer needed (one
    /// block as `f32`, one decoded strip or tile) against `limits.max_alloc`, before reading any
    /// pixel data: a header claiming 100000 × 100000 pixels is refused at once.
    pub fn open(path: &Path, limits: &Limits) -> Result<GeoRaster> {
        let mut file = File::open(path).map_err(|source| Error::Open {
            path: path.into(),
            source,
        })?;
        let meta = file.metadata().map_err(|source| Error::Open {
            path: path.into(),
            source,
        })?;
        if meta.is_dir() {
            return Err(decode(path, "is a folder, not an image file"));
        }
        let mut magic = [0u8; 4];
        let n = read_up_to(&mut file, &mut magic).map_err(|source| Error::Open {
            path: path.into(),
            source,
        })?;
        drop(file);
        if is_tiff_magic(&magic[..n]) {
            guarded(path, "opening the TIFF", || open_tiff(path, limits))
        } else {
            open_image(path, limits)
        }
    }

    /// What is known about the raster.
    pub fn info(&self) -> &RasterInfo {
        &self.info
    }

    /// The path the raster was opened from.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Number of blocks (strips, or rows of tiles), top to bottom.
    pub fn block_count(&self) -> usize {
        match &self.source {
            Source::Tiff(t) => t.down as usize,
            Source::Image(_) => 1,
        }
    }

    /// Rows in every block but possibly the last.
    pub fn block_rows(&self) -> u32 {
        match &self.source {
            Source::Tiff(t) => t.chunk_h,
            Source::Image(_) => self.info.height,
        }
    }

    /// Reads block `i` (all bands, full width; for planar files each band's chunks are read;
    /// for tiled files the tiles of one tile-row are stitched and the padding at the right and
    /// bottom edges cropped). Blocks may be read in any order, and more than once.
    pub fn read_block(&mut self, i: usize) -> Result<Block> {
        let count = self.block_count();
        if i >= count {
            return Err(decode(
                &self.path,
                format!("block {i} does not exist (the raster has {count} blocks)"),
            ));
        }
        match &mut self.source {
            Source::Image(d) => Ok(image_block(d)),
            Source::Tiff(t) => read_tiff_block(&self.path, &self.info, t, i as u32),
        }
    }
}

fn decode(path: &Path, message: impl Into<String>) -> Error {
    Error::Decode {
        path: path.into(),
        message: message.into(),
    }
}

fn unsupported(path: &Path, message: impl Into<String>) -> Error {
    Error::Unsupported {
        path: path.into(),
        message: message.into(),
    }
}

fn over_limit(path: &Path, message: impl Into<String>) -> Error {
    Error::LimitExceeded {
        path: path.into(),
        message: message.into(),
    }
}

fn read_up_to(r: &mut impl Read, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut n = 0;
    while n < buf.len() {
        match r.read(&mut buf[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(n)
}

fn is_tiff_magic(b: &[u8]) -> bool {
    matches!(b, [b'I', b'I', 42 | 43, 0] | [b'M', b'M', 0, 42 | 43])
}

/// Runs `f`, turning a panic inside the third-party TIFF code into a decode error, so that no
/// input file can bring the caller down.
fn guarded<T>(path: &Path, what: &str, f: impl FnOnce() -> Result<T>) -> Result<T> {
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(f)) {
        Ok(r) => r,
        Err(_) => Err(decode(
            path,
            format!("the TIFF decoder failed while {what} (corrupt file?)"),
        )),
    }
}

/// Maps a `tiff` crate error onto the library's error kinds.
fn tiff_error(path: &Path, e: TiffError) -> Error {
    match e {
        TiffError::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            decode(path, "TIFF data ends early (truncated file?)")
        }
        TiffError::IoError(io) => decode(path, format!("cannot read TIFF data: {io}")),
        TiffError::LimitsExceeded => over_limit(
            path,
            "a TIFF strip, tile or tag is larger than the decoder accepts \
             (re-save with smaller strips or tiles, or raise the memory limit)",
        ),
        TiffError::IntSizeError => over_limit(path, "TIFF sizes exceed what this platform handles"),
        TiffError::UnsupportedError(u) => unsupported(path, format!("TIFF feature: {u}")),
        TiffError::FormatError(f) => decode(path, format!("not a valid TIFF: {f}")),
        other => decode(path, format!("cannot decode TIFF: {other}")),
    }
}

fn tiff_limits(limits: &Limits) -> tiff::decoder::Limits {
    let cap = usize::try_from(limits.max_alloc).unwrap_or(usize::MAX);
    let mut l = tiff::decoder::Limits::default();
    l.decoding_buffer_size = cap;
    l.intermediate_buffer_size = cap;
    l
}

/// A reader that overlays two bytes at a fixed offset. Used to let the decoder read a file whose
/// PhotometricInterpretation says RGB while it holds more than three bands (common for
/// red-green-blue-near-infrared imagery): the value is read as BlackIsZero, which the decoder
/// exposes as plain multi-band data.
#[derive(Debug)]
struct PatchedReader<R> {
    inner: R,
    pos: u64,
    patch: Option<(u64, [u8; 2])>,
}

impl<R: Read> Read for PatchedReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        if let Some((at, bytes)) = self.patch {
            for (k, &b) in bytes.iter().enumerate() {
                let p = at + k as u64;
                if p >= self.pos && p < self.pos + n as u64 {
                    buf[(p - self.pos) as usize] = b;
                }
            }
        }
        self.pos += n as u64;
        Ok(n)
    }
}

impl<R: Seek> Seek for PatchedReader<R> {
    fn seek(&mut self, to: SeekFrom) -> std::io::Result<u64> {
        self.pos = self.inner.seek(to)?;
        Ok(self.pos)
    }
}

fn tiff_decoder(
    path: &Path,
    patch: Option<(u64, [u8; 2])>,
    limits: &Limits,
) -> Result<Decoder<PatchedReader<BufReader<File>>>> {
    let file = File::open(path).map_err(|source| Error::Open {
        path: path.into(),
        source,
    })?;
    let reader = PatchedReader {
        inner: BufReader::new(file),
        pos: 0,
        patch,
    };
    Ok(Decoder::new(reader)
        .map_err(|e| tiff_error(path, e))?
        .with_limits(tiff_limits(limits)))
}

/// Finds where the PhotometricInterpretation value of the first directory is stored, when it
/// is one inline SHORT. Returns the file offset and the bytes of the value 1 (BlackIsZero) in
/// the file's byte order.
fn photometric_patch(path: &Path) -> Option<(u64, [u8; 2])> {
    let mut f = BufReader::new(File::open(path).ok()?);
    let mut head = [0u8; 16];
    if read_up_to(&mut f, &mut head).ok()? < 8 {
        return None;
    }
    let big_endian = match &head[..2] {
        b"II" => false,
        b"MM" => true,
        _ => return None,
    };
    let u16_at = |b: &[u8]| {
        let a = [b[0], b[1]];
        if big_endian {
            u16::from_be_bytes(a)
        } else {
            u16::from_le_bytes(a)
        }
    };
    let u32_at = |b: &[u8]| {
        let a = [b[0], b[1], b[2], b[3]];
        if big_endian {
            u32::from_be_bytes(a)
        } else {
            u32::from_le_bytes(a)
        }
    };
    let u64_at = |b: &[u8]| {
        let mut a = [0u8; 8];
        a.copy_from_slice(&b[..8]);
        if big_endian {
            u64::from_be_bytes(a)
        } else {
            u64::from_le_bytes(a)
        }
    };
    let bigtiff = match u16_at(&head[2..4]) {
        42 => false,
        43 => true,
        _ => return None,
    };
    let ifd = if bigtiff {
        u64_at(&head[8..16])
    } else {
        u32_at(&head[4..8]) as u64
    };
    f.seek(SeekFrom::Start(ifd)).ok()?;
    let (entries, entry_len, value_at) = if bigtiff {
        let mut c = [0u8; 8];
        f.read_exact(&mut c).ok()?;
        (u64_at(&c), 20u64, 12u64)
    } else {
        let mut c = [0u8; 2];
        f.read_exact(&mut c).ok()?;
        (u16_at(&c) as u64, 12u64, 8u64)
    };
    let first = ifd + if bigtiff { 8 } else { 2 };
    let mut e = [0u8; 20];
    for k in 0..entries.min(4096) {
        f.read_exact(&mut e[..entry_len as usize]).ok()?;
        let tag = u16_at(&e[0..2]);
        if tag != 262 {
            continue;
        }
        let ty = u16_at(&e[2..4]);
        let count = if bigtiff {
            u64_at(&e[4..12])
        } else {
            u32_at(&e[4..8]) as u64
        };
        if ty != 3 || count != 1 {
            return None;
        }
        let at = first + k * entry_len + value_at;
        let one = if big_endian { [0, 1] } else { [1, 0] };
        return Some((at, one));
    }
    None
}

fn open_tiff(path: &Path, limits: &Limits) -> Result<GeoRaster> {
    let mut decoder = tiff_decoder(path, None, limits)?;
    for (tag, what) in [
        (Tag::SamplesPerPixel, "SamplesPerPixel (277)"),
        (
            Tag::PhotometricInterpretation,
            "PhotometricInterpretation (262)",
        ),
        (Tag::Compression, "Compression (259)"),
        (Tag::SampleFormat, "SampleFormat (339)"),
        (Tag::PlanarConfiguration, "PlanarConfiguration (284)"),
        (Tag::StripOffsets, "StripOffsets (273)"),
        (Tag::StripByteCounts, "StripByteCounts (279)"),
        (Tag::TileOffsets, "TileOffsets (324)"),
        (Tag::TileByteCounts, "TileByteCounts (325)"),
    ] {
        check_tag_fits(&mut decoder, tag, what, path)?;
    }
    let samples: u16 = decoder
        .find_tag_unsigned(Tag::SamplesPerPixel)
        .map_err(|e| tiff_error(path, e))?
        .unwrap_or(1);
    let fits = |d: &mut Decoder<_>| matches!(d.colortype(), Ok(c) if c.num_samples() == samples);
    if !fits(&mut decoder) {
        let photometric: Option<u16> = decoder
            .find_tag_unsigned(Tag::PhotometricInterpretation)
            .map_err(|e| tiff_error(path, e))?;
        let compression: Option<u16> = decoder
            .find_tag_unsigned(Tag::Compression)
            .map_err(|e| tiff_error(path, e))?;
        // RGB with extra bands (and not JPEG, whose decoder depends on the colour space).
        if photometric == Some(2) && !matches!(compression, Some(6 | 7)) {
            if let Some(patch) = photometric_patch(path) {
                let patched = tiff_decoder(path, Some(patch), limits)?;
                decoder = patched;
            }
        }
    }
    let colour = decoder.colortype().map_err(|e| tiff_error(path, e))?;
    match colour {
        ColorType::YCbCr(_) => {
            return Err(unsupported(
                path,
                "YCbCr (JPEG-compressed) TIFF; convert it to RGB first",
            ))
        }
        ColorType::Palette(_) => {
            return Err(unsupported(path, "palette (indexed-colour) TIFF"));
        }
        _ => {}
    }
    let bands = colour.num_samples() as usize;
    if bands != samples as usize {
        return Err(unsupported(
            path,
            format!(
                "the file has {samples} samples per pixel but the TIFF decoder exposes only \
                 {bands} of them ({colour:?})"
            ),
        ));
    }
    if !(1..=MAX_BANDS).contains(&bands) {
        return Err(unsupported(
            path,
            format!("{bands} bands; at most {MAX_BANDS} are supported"),
        ));
    }
    let bits = colour.bit_depth();
    let format: u16 = decoder
        .find_tag_unsigned_vec::<u16>(Tag::SampleFormat)
        .map_err(|e| tiff_error(path, e))?
        .and_then(|v| v.first().copied())
        .unwrap_or(1);
    let sample = SampleKind::from_tiff(format, bits).ok_or_else(|| {
        let kind = match format {
            1 => "unsigned integer",
            2 => "signed integer",
            3 => "floating-point",
            _ => "unknown-format",
        };
        unsupported(
            path,
            format!("{bits}-bit {kind} samples; supported are u8, u16, i16, u32, i32, f32 and f64"),
        )
    })?;
    let (width, height) = decoder.dimensions().map_err(|e| tiff_error(path, e))?;
    limits
        .check_dimensions(width, height, 1, 1)
        .map_err(|m| over_limit(path, m))?;
    check_chunks_fit(&mut decoder, path)?;

    let planar = decoder
        .find_tag_unsigned::<u16>(Tag::PlanarConfiguration)
        .map_err(|e| tiff_error(path, e))?
        == Some(2);
    let tiled = decoder.get_chunk_type() == ChunkType::Tile;
    let (chunk_w, raw_h) = decoder.chunk_dimensions();
    if chunk_w == 0 || raw_h == 0 {
        return Err(decode(path, "TIFF strips or tiles have zero size"));
    }
    let (chunk_w, chunk_h) = if tiled {
        (chunk_w, raw_h)
    } else {
        (width, raw_h.min(height))
    };
    let across = width.div_ceil(chunk_w);
    let down = height.div_ceil(chunk_h);
    let planes = if planar { bands as u32 } else { 1 };
    let expected = (across as u64) * (down as u64) * planes as u64;
    // Counted from the offsets tag: the decoder's own strip count overflows when RowsPerStrip
    // is 2^32 - 1 ("one strip"), which some writers use.
    let offsets = if tiled {
        Tag::TileOffsets
    } else {
        Tag::StripOffsets
    };
    let actual = decoder
        .image_ifd()
        .find_entry(offsets)
        .map_or(0, |e| e.count());
    if actual != expected || expected > u32::MAX as u64 {
        return Err(decode(
            path,
            format!("the TIFF lists {actual} strips or tiles; its layout needs {expected}"),
        ));
    }

    // Memory: one block as f32, and one decoded chunk in its stored type.
    let block_bytes = (chunk_h.min(height) as u64)
        .saturating_mul(width as u64)
        .saturating_mul(bands as u64)
        .saturating_mul(4);
    let chunk_samples = if planar { 1 } else { bands as u64 };
    let chunk_bytes = (chunk_w as u64)
        .saturating_mul(if tiled { raw_h } else { chunk_h } as u64)
        .saturating_mul(chunk_samples)
        .saturating_mul(sample.bytes() as u64);
    let need = block_bytes.max(chunk_bytes);
    if need > limits.max_alloc {
        return Err(over_limit(
            path,
            format!(
                "reading this TIFF needs {need} bytes at a time ({} of {chunk_w} x {raw_h} pixels, \
                 {bands} bands), over the limit of {} bytes; re-save it with smaller strips or tiles",
                if tiled { "tiles" } else { "strips" },
                limits.max_alloc
            ),
        ));
    }

    let geo = read_geo(&mut decoder, path)?;
    let nodata = read_nodata(&mut decoder, path)?;
    Ok(GeoRaster {
        path: path.into(),
        info: RasterInfo {
            width,
            height,
            bands,
            sample,
            planar,
            tiled,
            geo,
            nodata,
        },
        source: Source::Tiff(Box::new(TiffSource {
            decoder,
            chunk_w,
            chunk_h,
            across,
            down,
            poisoned: false,
        })),
    })
}

fn open_image(path: &Path, limits: &Limits) -> Result<GeoRaster> {
    // Header probe: refuse before decoding when the f32 block would be over the limit. Errors
    // here are left to the decoder below, which words them for the user.
    if let Ok((w, h)) = image::ImageReader::open(path)
        .and_then(|r| r.with_guessed_format())
        .map_err(image::ImageError::from)
        .and_then(|r| r.into_dimensions())
    {
        limits
            .check_dimensions(w, h, 1, 1)
            .map_err(|m| over_limit(path, m))?;
        let bytes = (w as u64).saturating_mul(h as u64).saturating_mul(3 * 4);
        if bytes > limits.max_alloc {
            return Err(over_limit(
                path,
                format!(
                    "{w} x {h} x 3 bands as f32 needs {bytes} bytes, over the limit of {} bytes",
                    limits.max_alloc
                ),
            ));
        }
    }
    let d = crate::raster::decode(path, limits)?;
    let sample = match d.pixels {
        crate::raster::Pixels::Rgba8(_) => SampleKind::U8,
        crate::raster::Pixels::Rgba16(_) => SampleKind::U16,
    };
    Ok(GeoRaster {
        path: path.into(),
        info: RasterInfo {
            width: d.width,
            height: d.height,
            bands: 3,
            sample,
            planar: false,
            tiled: false,
            geo: GeoTags::default(),
            nodata: None,
        },
        source: Source::Image(d),
    })
}

fn image_block(d: &crate::raster::Decoded) -> Block {
    let data: Vec<f32> = match &d.pixels {
        crate::raster::Pixels::Rgba8(p) => p
            .chunks_exact(4)
            .flat_map(|c| [c[0] as f32, c[1] as f32, c[2] as f32])
            .collect(),
        crate::raster::Pixels::Rgba16(p) => p
            .chunks_exact(4)
            .flat_map(|c| [c[0] as f32, c[1] as f32, c[2] as f32])
            .collect(),
    };
    Block {
        y0: 0,
        rows: d.height,
        data,
    }
}

fn geo_tag_name(code: u16) -> &'static str {
    match code {
        TAG_MODEL_PIXEL_SCALE => "ModelPixelScale",
        TAG_MODEL_TIEPOINT => "ModelTiepoint",
        TAG_MODEL_TRANSFORMATION => "ModelTransformation",
        TAG_GEO_KEY_DIRECTORY => "GeoKeyDirectory",
        TAG_GEO_DOUBLE_PARAMS => "GeoDoubleParams",
        TAG_GEO_ASCII_PARAMS => "GeoAsciiParams",
        TAG_GDAL_NODATA => "GDAL_NODATA",
        _ => "tag",
    }
}

fn flatten(v: Value) -> Vec<Value> {
    match v {
        Value::List(items) => items.into_iter().flat_map(flatten).collect(),
        other => vec![other],
    }
}

fn convert_all<T>(
    values: Vec<Value>,
    f: impl Fn(Value) -> tiff::TiffResult<T>,
) -> tiff::TiffResult<Vec<T>> {
    values.into_iter().map(f).collect()
}

/// Bytes one value of a TIFF field type takes in the file (TIFF 6.0 §2; BigTIFF adds the
/// 8-byte types).
fn type_bytes(t: Type) -> u64 {
    match t {
        Type::BYTE | Type::SBYTE | Type::ASCII | Type::UNDEFINED => 1,
        Type::SHORT | Type::SSHORT => 2,
        Type::LONG | Type::SLONG | Type::FLOAT | Type::IFD => 4,
        Type::LONG8
        | Type::SLONG8
        | Type::DOUBLE
        | Type::RATIONAL
        | Type::SRATIONAL
        | Type::IFD8 => 8,
        _ => 1,
    }
}

/// The size of the file at `path`, in bytes.
fn file_len(path: &Path) -> Result<u64> {
    std::fs::metadata(path)
        .map(|m| m.len())
        .map_err(|source| Error::Open {
            path: path.into(),
            source,
        })
}

/// Refuses a file whose strips or tiles, as its offsets and byte counts declare them, run
/// past its end: a truncated file is then refused before a block buffer is allocated for
/// data that is not there.
fn check_chunks_fit<R: Read + Seek>(decoder: &mut Decoder<R>, path: &Path) -> Result<()> {
    let file_len = file_len(path)?;
    for (offsets, counts) in [
        (Tag::StripOffsets, Tag::StripByteCounts),
        (Tag::TileOffsets, Tag::TileByteCounts),
    ] {
        let (Ok(o), Ok(c)) = (
            decoder.get_tag_u64_vec(offsets),
            decoder.get_tag_u64_vec(counts),
        ) else {
            continue;
        };
        if let Some((i, (off, n))) = o
            .iter()
            .zip(&c)
            .enumerate()
            .find(|(_, (&off, &n))| off.saturating_add(n) > file_len)
        {
            return Err(decode(
                path,
                format!(
                    "TIFF data ends early (truncated file?): strip/tile {i} spans bytes {off} to \
                     {} of a {file_len}-byte file",
                    off.saturating_add(*n)
                ),
            ));
        }
    }
    Ok(())
}

/// Refuses a tag of the first image whose declared values are longer than the whole file.
/// The `tiff` crate sizes its buffer from the declared count before it reads, and bounds
/// that only by the decoding limit, so a file of a few hundred bytes could otherwise make
/// it allocate gigabytes for one tag.
fn check_tag_fits<R: Read + Seek>(
    decoder: &mut Decoder<R>,
    tag: Tag,
    what: &str,
    path: &Path,
) -> Result<()> {
    let Some(entry) = decoder.image_ifd().find_entry(tag) else {
        return Ok(());
    };
    let file_len = file_len(path)?;
    let bytes = entry.count().saturating_mul(type_bytes(entry.field_type()));
    if bytes > file_len {
        return Err(decode(
            path,
            format!(
                "TIFF tag {what} claims {} values ({bytes} bytes) but the file has only \
                 {file_len} bytes (corrupt file?)",
                entry.count()
            ),
        ));
    }
    Ok(())
}

fn read_geo<R: Read + Seek>(decoder: &mut Decoder<R>, path: &Path) -> Result<GeoTags> {
    let mut geo = GeoTags::default();
    for code in [
        TAG_MODEL_PIXEL_SCALE,
        TAG_MODEL_TIEPOINT,
        TAG_MODEL_TRANSFORMATION,
        TAG_GEO_KEY_DIRECTORY,
        TAG_GEO_DOUBLE_PARAMS,
        TAG_GEO_ASCII_PARAMS,
    ] {
        let tag = Tag::from_u16_exhaustive(code);
        let Some(entry) = decoder.image_ifd().find_entry(tag) else {
            continue;
        };
        let name = geo_tag_name(code);
        check_tag_fits(decoder, tag, &format!("{name} ({code})"), path)?;
        let bad = |e: TiffError| {
            decode(
                path,
                format!("cannot read GeoTIFF tag {name} ({code}): {e}"),
            )
        };
        let Some(value) = decoder.find_tag(tag).map_err(bad)? else {
            continue;
        };
        let parsed = match entry.field_type() {
            Type::SHORT => {
                GeoTagValue::Short(convert_all(flatten(value), Value::into_u16).map_err(bad)?)
            }
            Type::LONG => {
                GeoTagValue::Long(convert_all(flatten(value), Value::into_u32).map_err(bad)?)
            }
            Type::FLOAT => {
                GeoTagValue::Float(convert_all(flatten(value), Value::into_f32).map_err(bad)?)
            }
            Type::DOUBLE => {
                GeoTagValue::Double(convert_all(flatten(value), Value::into_f64).map_err(bad)?)
            }
            Type::ASCII => GeoTagValue::Ascii(value.into_string().map_err(bad)?),
            other => {
                return Err(unsupported(
                    path,
                    format!(
                        "GeoTIFF tag {name} ({code}) has TIFF type {other:?}; \
                         SHORT, LONG, FLOAT, DOUBLE or ASCII expected"
                    ),
                ))
            }
        };
        if let Some(slot) = geo.slot_mut(code) {
            *slot = Some(parsed);
        }
    }
    Ok(geo)
}

/// Parses a GDAL_NODATA text ("0", "-9999", "nan", "-inf", " 1e-3 ").
pub fn parse_nodata(text: &str) -> Option<f64> {
    let t = text.trim_matches(|c: char| c.is_whitespace() || c == '\0');
    t.parse::<f64>().ok()
}

fn read_nodata<R: Read + Seek>(decoder: &mut Decoder<R>, path: &Path) -> Result<Option<f64>> {
    let tag = Tag::from_u16_exhaustive(TAG_GDAL_NODATA);
    check_tag_fits(decoder, tag, "GDAL_NODATA (42113)", path)?;
    let Some(value) = decoder
        .find_tag(tag)
        .map_err(|e| decode(path, format!("cannot read GDAL_NODATA (42113): {e}")))?
    else {
        return Ok(None);
    };
    let text = value
        .into_string()
        .map_err(|_| decode(path, "GDAL_NODATA (42113) is not ASCII text"))?;
    parse_nodata(&text).map(Some).ok_or_else(|| {
        decode(
            path,
            format!("GDAL_NODATA (42113) value {text:?} is not a number"),
        )
    })
}

/// Where one decoded chunk goes in a block.
struct Placement {
    /// Rows to copy.
    rows: usize,
    /// Width of the chunk's data (after cropping the padding), in pixels.
    src_w: usize,
    /// Samples per pixel in the chunk (1 for planar files).
    spp: usize,
    /// Image width, in pixels.
    out_w: usize,
    /// First image column of the chunk.
    x0: usize,
    /// Bands per pixel in the block.
    bands: usize,
    /// Band of a planar chunk (0 for chunky ones).
    band: usize,
}

fn place<T: Copy>(src: &[T], to_f32: impl Fn(T) -> f32, out: &mut [f32], p: &Placement) {
    let src_row = p.src_w * p.spp;
    for r in 0..p.rows {
        let row = &src[r * src_row..(r + 1) * src_row];
        let base = (r * p.out_w + p.x0) * p.bands;
        if p.spp == p.bands {
            for (d, &s) in out[base..base + src_row].iter_mut().zip(row) {
                *d = to_f32(s);
            }
        } else {
            for (x, &s) in row.iter().enumerate() {
                out[base + x * p.bands + p.band] = to_f32(s);
            }
        }
    }
}

fn result_len(r: &DecodingResult) -> usize {
    match r {
        DecodingResult::U8(v) => v.len(),
        DecodingResult::U16(v) => v.len(),
        DecodingResult::I16(v) => v.len(),
        DecodingResult::U32(v) => v.len(),
        DecodingResult::I32(v) => v.len(),
        DecodingResult::F32(v) => v.len(),
        DecodingResult::F64(v) => v.len(),
        _ => 0,
    }
}

fn read_tiff_block(path: &Path, info: &RasterInfo, t: &mut TiffSource, i: u32) -> Result<Block> {
    if t.poisoned {
        return Err(decode(
            path,
            "an earlier read failed inside the TIFF decoder; reopen the file",
        ));
    }
    let y0 = i * t.chunk_h;
    let rows = t.chunk_h.min(info.height - y0);
    let width = info.width as usize;
    let bands = info.bands;
    let len = rows as usize * width * bands;
    let mut data: Vec<f32> = Vec::new();
    data.try_reserve_exact(len)
        .map_err(|_| over_limit(path, format!("cannot allocate {len} samples for a block")))?;
    data.resize(len, 0.0);

    let planes = if info.planar { bands } else { 1 };
    let spp = if info.planar { 1 } else { bands };
    let per_plane = t.across * t.down;
    for plane in 0..planes {
        for c in 0..t.across {
            let chunk = plane as u32 * per_plane + i * t.across + c;
            let x0 = (c * t.chunk_w) as usize;
            let src_w = (t.chunk_w as usize).min(width - x0);
            let decoder = &mut t.decoder;
            let result = match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                decoder.read_chunk(chunk)
            })) {
                Ok(r) => r.map_err(|e| tiff_error(path, e))?,
                Err(_) => {
                    t.poisoned = true;
                    return Err(decode(
                        path,
                        format!("the TIFF decoder failed on strip/tile {chunk} (corrupt data?)"),
                    ));
                }
            };
            let n = result_len(&result);
            let per_row = src_w * spp;
            if n % per_row != 0 || n / per_row < rows as usize {
                return Err(decode(
                    path,
                    format!(
                        "strip/tile {chunk} decoded to {n} samples; {} rows of {src_w} pixels \
                         x {spp} samples were expected",
                        rows
                    ),
                ));
            }
            let p = Placement {
                rows: rows as usize,
                src_w,
                spp,
                out_w: width,
                x0,
                bands,
                band: plane,
            };
            match (&result, info.sample) {
                (DecodingResult::U8(v), SampleKind::U8) => place(v, |s| s as f32, &mut data, &p),
                (DecodingResult::U16(v), SampleKind::U16) => place(v, |s| s as f32, &mut data, &p),
                (DecodingResult::I16(v), SampleKind::I16) => place(v, |s| s as f32, &mut data, &p),
                (DecodingResult::U32(v), SampleKind::U32) => place(v, |s| s as f32, &mut data, &p),
                (DecodingResult::I32(v), SampleKind::I32) => place(v, |s| s as f32, &mut data, &p),
                (DecodingResult::F32(v), SampleKind::F32) => place(v, |s| s, &mut data, &p),
                (DecodingResult::F64(v), SampleKind::F64) => place(v, |s| s as f32, &mut data, &p),
                _ => {
                    return Err(decode(
                        path,
                        format!(
                            "strip/tile {chunk} decoded to a sample type other than {}",
                            info.sample.name()
                        ),
                    ))
                }
            }
        }
    }
    Ok(Block { y0, rows, data })
}

/// Reads the GeoTags of the first image of any TIFF file (for tests: compare input and output
/// tags). A TIFF without GeoTIFF tags gives empty [`GeoTags`].
pub fn read_geotags(path: &Path) -> Result<GeoTags> {
    guarded(path, "reading GeoTIFF tags", || {
        let mut decoder = tiff_decoder(path, None, &Limits::default())?;
        read_geo(&mut decoder, path)
    })
}

fn writer_error(e: TiffError) -> Error {
    match e {
        TiffError::IoError(source) => Error::io(OUTPUT_NAME, source),
        other => Error::output(OUTPUT_NAME, format!("cannot write GeoTIFF: {other}")),
    }
}

/// Rows per strip for a row of `row_bytes` bytes: strips of about 256 KiB, at least one row.
fn rows_per_strip(row_bytes: u64, height: u32) -> u32 {
    let rows = (STRIP_TARGET_BYTES / row_bytes.max(1)).max(1);
    rows.min(height as u64) as u32
}

fn check_ascii_value(what: &str, s: &str) -> Result<()> {
    if !s.is_ascii() || s.bytes().any(|b| b == 0) {
        return Err(Error::output(
            OUTPUT_NAME,
            format!("{what} must be ASCII text without NUL characters"),
        ));
    }
    Ok(())
}

fn write_band<W, C>(
    w: W,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    strip_rows: Option<u32>,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<C::Inner>>,
) -> Result<()>
where
    W: Write + Seek,
    C: colortype::ColorType,
    [C::Inner]: tiff::encoder::TiffValue,
{
    if width == 0 || height == 0 {
        return Err(Error::output(
            OUTPUT_NAME,
            format!("cannot write an empty raster ({width} x {height})"),
        ));
    }
    if let Some(text) = nodata {
        check_ascii_value("the nodata value", text)?;
        if parse_nodata(text).is_none() {
            return Err(Error::output(
                OUTPUT_NAME,
                format!("the nodata value {text:?} is not a number"),
            ));
        }
    }
    for (code, value) in geo.entries() {
        if let GeoTagValue::Ascii(s) = value {
            check_ascii_value(geo_tag_name(code), s)?;
        }
    }
    let sample_bytes = std::mem::size_of::<C::Inner>() as u64;
    let rps = strip_rows
        .unwrap_or_else(|| rows_per_strip(width as u64 * sample_bytes, height))
        .clamp(1, height);

    let mut encoder = TiffEncoder::new(w).map_err(writer_error)?;
    let mut image = encoder
        .new_image::<C>(width, height)
        .map_err(writer_error)?;
    image.rows_per_strip(rps).map_err(writer_error)?;
    {
        let dir = image.encoder();
        for (code, value) in geo.entries() {
            let tag = Tag::from_u16_exhaustive(code);
            match value {
                GeoTagValue::Short(v) => dir.write_tag(tag, &v[..]),
                GeoTagValue::Long(v) => dir.write_tag(tag, &v[..]),
                GeoTagValue::Float(v) => dir.write_tag(tag, &v[..]),
                GeoTagValue::Double(v) => dir.write_tag(tag, &v[..]),
                GeoTagValue::Ascii(s) => dir.write_tag(tag, s.as_str()),
            }
            .map_err(writer_error)?;
        }
        if let Some(text) = nodata {
            dir.write_tag(Tag::from_u16_exhaustive(TAG_GDAL_NODATA), text)
                .map_err(writer_error)?;
        }
    }
    let mut y0 = 0u32;
    while y0 < height {
        let rows = rps.min(height - y0);
        let values = next_rows(y0, rows)?;
        let expected = rows as usize * width as usize;
        if values.len() != expected {
            return Err(Error::output(
                OUTPUT_NAME,
                format!(
                    "rows {y0}..{} came with {} values; {expected} ({rows} rows x {width}) were expected",
                    y0 + rows,
                    values.len()
                ),
            ));
        }
        image.write_strip(&values).map_err(writer_error)?;
        y0 += rows;
    }
    image.finish().map_err(writer_error)
}

/// Writes a single-band 8-bit unsigned GeoTIFF strip by strip (memory bounded by one strip of
/// about 256 KiB), uncompressed, with the GeoTags written back unchanged and an optional
/// GDAL_NODATA (42113) ASCII value (must parse as a number). `next_rows(y0, rows)` is called
/// for each strip in order, top to bottom, and must return exactly `rows × width` values
/// (row-major); the last strip may be shorter than the others.
pub fn write_u8_band<W: Write + Seek>(
    w: W,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<u8>>,
) -> Result<()> {
    write_band::<W, colortype::Gray8>(w, width, height, geo, nodata, None, next_rows)
}

/// Writes a single-band 32-bit float GeoTIFF strip by strip; otherwise as [`write_u8_band`].
pub fn write_f32_band<W: Write + Seek>(
    w: W,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<f32>>,
) -> Result<()> {
    write_band::<W, colortype::Gray32Float>(w, width, height, geo, nodata, None, next_rows)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::Value as Json;
    use std::time::{Duration, Instant};

    fn fixtures() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rasters")
    }

    fn expected() -> Json {
        let text = std::fs::read_to_string(fixtures().join("expected.json")).unwrap();
        serde_json::from_str(&text).unwrap()
    }

    fn files() -> Vec<Json> {
        expected()["files"].as_array().unwrap().clone()
    }

    fn file(name: &str) -> Json {
        files()
            .into_iter()
            .find(|f| f["file"] == name)
            .unwrap_or_else(|| panic!("{name} not in expected.json"))
    }

    /// Reads every block in order, checking that they tile the rows exactly once.
    fn read_all(r: &mut GeoRaster) -> Vec<f32> {
        let info = r.info().clone();
        let mut all = Vec::new();
        let mut next_row = 0u32;
        for i in 0..r.block_count() {
            let b = r.read_block(i).unwrap();
            assert_eq!(b.y0, next_row, "block {i} starts at the next row");
            assert!(b.rows >= 1);
            assert_eq!(
                b.data.len(),
                b.rows as usize * info.width as usize * info.bands
            );
            next_row += b.rows;
            all.extend_from_slice(&b.data);
        }
        assert_eq!(next_row, info.height, "blocks cover every row once");
        all
    }

    fn open(name: &str) -> GeoRaster {
        GeoRaster::open(&fixtures().join(name), &Limits::default())
            .unwrap_or_else(|e| panic!("{name}: {e}"))
    }

    fn weight(y: usize, x: usize) -> f64 {
        (1 + (31 * y + 17 * x) % 101) as f64
    }

    fn sample_name(s: SampleKind) -> &'static str {
        s.name()
    }

    #[test]
    fn every_fixture_decodes_to_the_expected_values() {
        let list = files();
        assert_eq!(list.len(), 11);
        for f in list {
            let name = f["file"].as_str().unwrap();
            let mut r = open(name);
            let info = r.info().clone();
            assert_eq!(info.width as u64, f["width"].as_u64().unwrap(), "{name}");
            assert_eq!(info.height as u64, f["height"].as_u64().unwrap(), "{name}");
            assert_eq!(info.bands as u64, f["bands"].as_u64().unwrap(), "{name}");
            assert_eq!(
                sample_name(info.sample),
                f["sample"].as_str().unwrap(),
                "{name}"
            );
            assert_eq!(info.planar, f["planar"].as_bool().unwrap(), "{name}");
            assert_eq!(info.tiled, f["tiled"].as_bool().unwrap(), "{name}");
            let all = read_all(&mut r);
            let (w, h, bands) = (info.width as usize, info.height as usize, info.bands);
            for (b, sums) in f["checksums"].as_array().unwrap().iter().enumerate() {
                let (mut count, mut nan_count, mut sum, mut wsum, mut nan_wsum) =
                    (0u64, 0u64, 0f64, 0f64, 0f64);
                for y in 0..h {
                    for x in 0..w {
                        let v = all[(y * w + x) * bands + b] as f64;
                        if v.is_nan() {
                            nan_count += 1;
                            nan_wsum += weight(y, x);
                        } else {
                            count += 1;
                            sum += v;
                            wsum += v * weight(y, x);
                        }
                    }
                }
                assert_eq!(count, sums["count"].as_u64().unwrap(), "{name} band {b}");
                assert_eq!(
                    nan_count,
                    sums["nan_count"].as_u64().unwrap(),
                    "{name} band {b}"
                );
                assert_eq!(sum, sums["sum"].as_f64().unwrap(), "{name} band {b}");
                assert_eq!(wsum, sums["wsum"].as_f64().unwrap(), "{name} band {b}");
                assert_eq!(
                    nan_wsum,
                    sums["nan_wsum"].as_f64().unwrap(),
                    "{name} band {b}"
                );
            }
            for px in f["pixels"].as_array().unwrap() {
                let (y, x) = (
                    px["y"].as_u64().unwrap() as usize,
                    px["x"].as_u64().unwrap() as usize,
                );
                for (b, want) in px["values"].as_array().unwrap().iter().enumerate() {
                    let got = all[(y * w + x) * bands + b];
                    match want.as_f64() {
                        Some(v) => assert_eq!(got as f64, v, "{name} ({y},{x}) band {b}"),
                        None => assert!(got.is_nan(), "{name} ({y},{x}) band {b}"),
                    }
                }
            }
        }
    }

    #[test]
    fn u16_layouts_decode_identically() {
        let base = read_all(&mut open("utm_u16_4band_strips.tif"));
        for name in [
            "utm_u16_4band_planar_tiled_deflate.tif",
            "utm_u16_4band_lzw.tif",
            // Big-endian BigTIFF whose PhotometricInterpretation says RGB: all four bands.
            "utm_u16_rgbn_bigtiff_be.tif",
        ] {
            assert_eq!(read_all(&mut open(name)), base, "{name}");
        }
        // The i16 file holds the first three bands minus 30000.
        let i16 = read_all(&mut open("utm_i16_3band_tiled.tif"));
        for p in 0..40 * 30 {
            for b in 0..3 {
                assert_eq!(i16[p * 3 + b], base[p * 4 + b] - 30000.0);
            }
        }
        // The 4-band u8 file is the base data modulo 251, all four bands.
        let rgbn = read_all(&mut open("utm_u8_rgbn_photometric_rgb.tif"));
        assert_eq!(rgbn.len(), base.len());
        for (a, b) in rgbn.iter().zip(&base) {
            assert_eq!(*a, (*b as u32 % 251) as f32);
        }
    }

    #[test]
    fn block_layouts_and_random_access() {
        for (name, blocks, rows) in [
            ("utm_u16_4band_strips.tif", 5, 7),
            ("utm_u16_4band_planar_tiled_deflate.tif", 2, 16),
            ("utm_u16_4band_lzw.tif", 8, 4),
            ("utm_i16_3band_tiled.tif", 2, 16),
            ("utm_f32_6band_nan.tif", 4, 8),
            ("geographic_u8_rgb.tif", 1, 30),
            ("utm_u16_rgbn_bigtiff_be.tif", 6, 5),
        ] {
            let mut r = open(name);
            assert_eq!(r.block_count(), blocks, "{name}");
            assert_eq!(r.block_rows(), rows, "{name}");
            let forward = read_all(&mut r);
            // Backwards, then again: same blocks.
            let mut back: Vec<Block> = (0..blocks)
                .rev()
                .map(|i| r.read_block(i).unwrap())
                .collect();
            back.reverse();
            let joined: Vec<f32> = back.iter().flat_map(|b| b.data.clone()).collect();
            assert_eq!(
                joined.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                forward.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                "{name}"
            );
            let last = back.last().unwrap();
            assert_eq!(last.y0 + last.rows, 30);
            assert!(matches!(r.read_block(blocks), Err(Error::Decode { .. })));
        }
    }

    fn json_reals(v: &Json) -> Option<GeoTagValue> {
        v.as_array()
            .map(|a| GeoTagValue::Double(a.iter().map(|x| x.as_f64().unwrap()).collect()))
    }

    fn expected_geo(f: &Json) -> GeoTags {
        let g = &f["geo"];
        if g.is_null() {
            return GeoTags::default();
        }
        GeoTags {
            pixel_scale: json_reals(&g["pixel_scale"]),
            tiepoint: json_reals(&g["tiepoint"]),
            transformation: json_reals(&g["transformation"]),
            key_directory: g["key_directory"].as_array().map(|a| {
                GeoTagValue::Short(a.iter().map(|x| x.as_u64().unwrap() as u16).collect())
            }),
            double_params: json_reals(&g["double_params"]),
            ascii_params: g["ascii_params"]
                .as_str()
                .map(|s| GeoTagValue::Ascii(s.to_string())),
        }
    }

    #[test]
    fn geotags_read_as_written() {
        for f in files() {
            let name = f["file"].as_str().unwrap();
            let want = expected_geo(&f);
            let r = open(name);
            assert_eq!(r.info().geo, want, "{name}");
            assert_eq!(
                read_geotags(&fixtures().join(name)).unwrap(),
                want,
                "{name}"
            );
            assert_eq!(want.is_empty(), name.starts_with("plain_"), "{name}");
            if !want.is_empty() {
                assert_eq!(want.validate(), Ok(()), "{name}");
            }
        }
        let utm = open("utm_u16_4band_strips.tif");
        assert_eq!(utm.info().geo.geo_key(1024), Some(1));
        assert_eq!(utm.info().geo.geo_key(3072), Some(32633));
        assert_eq!(utm.info().geo.geo_key(3076), Some(9001));
        assert_eq!(
            utm.info().geo.geo_key(1026),
            None,
            "ASCII key is not a SHORT"
        );
        assert_eq!(utm.info().geo.geo_key(4096), None);
    }

    #[test]
    fn pixel_area_in_square_metres() {
        let area = |name: &str| open(name).info().geo.pixel_area_m2();
        for name in [
            "utm_u16_4band_strips.tif",
            "utm_u16_4band_planar_tiled_deflate.tif",
            "utm_f32_6band_nan.tif",
        ] {
            assert_eq!(area(name), Some(100.0), "{name}");
        }
        assert_eq!(area("utm_u8_rgbn_photometric_rgb.tif"), Some(0.25));
        assert_eq!(area("geographic_u8_rgb.tif"), None);
        assert_eq!(area("plain_u32_1band.tif"), None);
        let t = area("transform_f64_1band.tif").unwrap();
        assert!((t - 4.0).abs() < 1e-9, "{t}");
    }

    fn keys(entries: &[[u16; 4]]) -> GeoTagValue {
        let mut v = vec![1, 1, 0, entries.len() as u16];
        for e in entries {
            v.extend_from_slice(e);
        }
        GeoTagValue::Short(v)
    }

    #[test]
    fn pixel_area_rules() {
        let scale = Some(GeoTagValue::Double(vec![30.0, 20.0, 0.0]));
        let with = |k: &[[u16; 4]]| GeoTags {
            pixel_scale: scale.clone(),
            key_directory: Some(keys(k)),
            ..GeoTags::default()
        };
        // Projected + metre units.
        assert_eq!(
            with(&[[1024, 0, 1, 1], [3076, 0, 1, 9001]]).pixel_area_m2(),
            Some(600.0)
        );
        // UTM code alone (no model type, no units).
        assert_eq!(with(&[[3072, 0, 1, 32755]]).pixel_area_m2(), Some(600.0));
        // UTM code with feet.
        assert_eq!(
            with(&[[3072, 0, 1, 32633], [3076, 0, 1, 9002]]).pixel_area_m2(),
            None
        );
        // Non-UTM projected code without units: unknown.
        assert_eq!(
            with(&[[1024, 0, 1, 1], [3072, 0, 1, 3857]]).pixel_area_m2(),
            None
        );
        // Geographic.
        assert_eq!(
            with(&[[1024, 0, 1, 2], [2048, 0, 1, 4326]]).pixel_area_m2(),
            None
        );
        // No key directory at all.
        let bare = GeoTags {
            pixel_scale: scale.clone(),
            ..GeoTags::default()
        };
        assert_eq!(bare.pixel_area_m2(), None);
        // Bad scale.
        let mut g = with(&[[3072, 0, 1, 32633]]);
        g.pixel_scale = Some(GeoTagValue::Double(vec![-30.0, 20.0, 0.0]));
        assert_eq!(g.pixel_area_m2(), None);
        g.pixel_scale = Some(GeoTagValue::Double(vec![f64::NAN, 20.0, 0.0]));
        assert_eq!(g.pixel_area_m2(), None);
        // Transformation: |det| of the 2x2 part.
        g.pixel_scale = None;
        let mut m = vec![0.0; 16];
        m[0] = 3.0;
        m[1] = 1.0;
        m[4] = 1.0;
        m[5] = -5.0;
        m[15] = 1.0;
        g.transformation = Some(GeoTagValue::Double(m));
        assert_eq!(g.pixel_area_m2(), Some(16.0));
    }

    fn good_geo() -> GeoTags {
        expected_geo(&file("utm_u16_4band_strips.tif"))
    }

    #[test]
    fn validate_catches_each_inconsistency() {
        let good = good_geo();
        assert_eq!(good.validate(), Ok(()));
        assert_eq!(GeoTags::default().validate(), Ok(()));
        let d = |v: Vec<f64>| Some(GeoTagValue::Double(v));
        let mut identity = vec![0.0; 16];
        for i in 0..4 {
            identity[i * 5] = 1.0;
        }
        let cases: Vec<(&str, GeoTags)> = vec![
            (
                "zero scale",
                GeoTags {
                    pixel_scale: d(vec![0.0, 10.0, 0.0]),
                    ..good.clone()
                },
            ),
            (
                "negative scale",
                GeoTags {
                    pixel_scale: d(vec![10.0, -10.0, 0.0]),
                    ..good.clone()
                },
            ),
            (
                "NaN scale",
                GeoTags {
                    pixel_scale: d(vec![f64::NAN, 10.0, 0.0]),
                    ..good.clone()
                },
            ),
            (
                "infinite scale z",
                GeoTags {
                    pixel_scale: d(vec![10.0, 10.0, f64::INFINITY]),
                    ..good.clone()
                },
            ),
            (
                "short scale",
                GeoTags {
                    pixel_scale: d(vec![10.0]),
                    ..good.clone()
                },
            ),
            (
                "ascii scale",
                GeoTags {
                    pixel_scale: Some(GeoTagValue::Ascii("10".into())),
                    ..good.clone()
                },
            ),
            (
                "tiepoint of 5",
                GeoTags {
                    tiepoint: d(vec![0.0; 5]),
                    ..good.clone()
                },
            ),
            (
                "empty tiepoint",
                GeoTags {
                    tiepoint: d(vec![]),
                    ..good.clone()
                },
            ),
            (
                "NaN tiepoint",
                GeoTags {
                    tiepoint: d(vec![0.0, 0.0, 0.0, f64::NAN, 1.0, 0.0]),
                    ..good.clone()
                },
            ),
            (
                "transformation of 15",
                GeoTags {
                    pixel_scale: None,
                    tiepoint: None,
                    transformation: d(vec![1.0; 15]),
                    ..good.clone()
                },
            ),
            (
                "singular transformation",
                GeoTags {
                    pixel_scale: None,
                    tiepoint: None,
                    transformation: d(vec![1.0; 16]),
                    ..good.clone()
                },
            ),
            (
                "infinite transformation",
                GeoTags {
                    pixel_scale: None,
                    tiepoint: None,
                    transformation: d({
                        let mut m = identity.clone();
                        m[3] = f64::INFINITY;
                        m
                    }),
                    ..good.clone()
                },
            ),
            (
                "scale+tiepoint and transformation",
                GeoTags {
                    transformation: d(identity.clone()),
                    ..good.clone()
                },
            ),
            (
                "tiepoint and transformation",
                GeoTags {
                    pixel_scale: None,
                    transformation: d(identity.clone()),
                    ..good.clone()
                },
            ),
            (
                "key version 2",
                GeoTags {
                    key_directory: Some(GeoTagValue::Short(vec![2, 1, 0, 1, 1024, 0, 1, 1])),
                    ..good.clone()
                },
            ),
            (
                "key count too high",
                GeoTags {
                    key_directory: Some(GeoTagValue::Short(vec![1, 1, 0, 2, 1024, 0, 1, 1])),
                    ..good.clone()
                },
            ),
            (
                "key count too low",
                GeoTags {
                    key_directory: Some(GeoTagValue::Short(vec![1, 1, 0, 0, 1024, 0, 1, 1])),
                    ..good.clone()
                },
            ),
            (
                "short key header",
                GeoTags {
                    key_directory: Some(GeoTagValue::Short(vec![1, 1])),
                    ..good.clone()
                },
            ),
            (
                "double key directory",
                GeoTags {
                    key_directory: Some(GeoTagValue::Double(vec![1.0, 1.0, 0.0, 0.0])),
                    ..good.clone()
                },
            ),
            (
                "key past double params",
                GeoTags {
                    key_directory: Some(keys(&[[2057, 34736, 1, 2]])),
                    ..good.clone()
                },
            ),
            (
                "key without double params",
                GeoTags {
                    double_params: None,
                    ..good.clone()
                },
            ),
            (
                "key past ascii params",
                GeoTags {
                    key_directory: Some(keys(&[[1026, 34737, 40, 0]])),
                    ..good.clone()
                },
            ),
            (
                "key in unknown tag",
                GeoTags {
                    key_directory: Some(keys(&[[1024, 300, 1, 0]])),
                    ..good.clone()
                },
            ),
            (
                "inline key with count 2",
                GeoTags {
                    key_directory: Some(keys(&[[1024, 0, 2, 1]])),
                    ..good.clone()
                },
            ),
            (
                "ascii params as doubles",
                GeoTags {
                    ascii_params: d(vec![1.0]),
                    ..good.clone()
                },
            ),
        ];
        for (what, g) in cases {
            let r = g.validate();
            assert!(r.is_err(), "{what}: {g:?} passed validation");
        }
        // A transformation alone is fine.
        let t = GeoTags {
            pixel_scale: None,
            tiepoint: None,
            transformation: d(identity),
            ..good
        };
        assert_eq!(t.validate(), Ok(()));
    }

    #[test]
    fn geotag_equality_is_by_type_and_bits() {
        let a = GeoTagValue::Short(vec![1, 2]);
        assert_ne!(a, GeoTagValue::Long(vec![1, 2]));
        assert_eq!(
            GeoTagValue::Double(vec![f64::NAN]),
            GeoTagValue::Double(vec![f64::NAN])
        );
        assert_ne!(
            GeoTagValue::Double(vec![0.0]),
            GeoTagValue::Double(vec![-0.0])
        );
        assert_ne!(
            GeoTagValue::Double(vec![1.0]),
            GeoTagValue::Float(vec![1.0])
        );
        let g = good_geo();
        let mut h = g.clone();
        assert_eq!(g, h);
        h.ascii_params = None;
        assert_ne!(g, h);
        assert_eq!(g.entries().len(), 5);
        assert!(!g.is_empty());
        assert!(GeoTags::default().is_empty());
    }

    #[test]
    fn nodata_is_parsed() {
        assert_eq!(open("utm_u16_4band_strips.tif").info().nodata, Some(0.0));
        assert_eq!(open("utm_u16_4band_lzw.tif").info().nodata, Some(0.0));
        let f = open("utm_f32_6band_nan.tif");
        assert!(f.info().nodata.unwrap().is_nan());
        assert!(f.info().is_nodata(f32::NAN));
        assert!(!f.info().is_nodata(0.0));
        assert_eq!(open("utm_i16_3band_tiled.tif").info().nodata, None);
        assert_eq!(open("geographic_u8_rgb.tif").info().nodata, None);
        let u = open("utm_u16_4band_strips.tif");
        assert!(u.info().is_nodata(0.0));
        assert!(!u.info().is_nodata(1.0));
        assert_eq!(parse_nodata("-9999"), Some(-9999.0));
        assert_eq!(parse_nodata(" 1e3 \0"), Some(1000.0));
        assert_eq!(parse_nodata("-inf"), Some(f64::NEG_INFINITY));
        assert!(parse_nodata("NaN").unwrap().is_nan());
        assert_eq!(parse_nodata("none"), None);
        assert_eq!(parse_nodata(""), None);
    }

    fn read_back_u8(path: &Path) -> (u32, u32, Vec<u8>, u32) {
        let mut d = Decoder::new(File::open(path).unwrap()).unwrap();
        assert_eq!(d.colortype().unwrap(), ColorType::Gray(8));
        let (w, h) = d.dimensions().unwrap();
        let strips = d.strip_count().unwrap();
        match d.read_image().unwrap() {
            DecodingResult::U8(v) => (w, h, v, strips),
            other => panic!("unexpected {other:?}"),
        }
    }

    fn read_back_f32(path: &Path) -> (u32, u32, Vec<f32>, u32) {
        let mut d = Decoder::new(File::open(path).unwrap()).unwrap();
        assert_eq!(d.colortype().unwrap(), ColorType::Gray(32));
        let (w, h) = d.dimensions().unwrap();
        let strips = d.strip_count().unwrap();
        match d.read_image().unwrap() {
            DecodingResult::F32(v) => (w, h, v, strips),
            other => panic!("unexpected {other:?}"),
        }
    }

    fn nodata_text(path: &Path) -> Option<String> {
        let mut d = Decoder::new(File::open(path).unwrap()).unwrap();
        d.find_tag(Tag::GdalNodata)
            .unwrap()
            .map(|v| v.into_string().unwrap())
    }

    #[test]
    fn u8_band_round_trip_keeps_pixels_and_geotags() {
        let input = fixtures().join("utm_u16_4band_strips.tif");
        let mut src = open("utm_u16_4band_strips.tif");
        let geo = src.info().geo.clone();
        let (w, h) = (src.info().width, src.info().height);
        let all = read_all(&mut src);
        let band0: Vec<u8> = all
            .chunks_exact(4)
            .map(|p| (p[0] as u32 % 256) as u8)
            .collect();

        let out = tempfile::NamedTempFile::new().unwrap();
        let mut calls = Vec::new();
        write_u8_band(
            out.reopen().unwrap(),
            w,
            h,
            &geo,
            Some("0"),
            &mut |y0, rows| {
                calls.push((y0, rows));
                Ok(band0[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec())
            },
        )
        .unwrap();
        assert_eq!(calls, vec![(0, 30)], "small images fit in one strip");
        let (ow, oh, pixels, _) = read_back_u8(out.path());
        assert_eq!((ow, oh), (w, h));
        assert_eq!(pixels, band0);
        assert_eq!(
            read_geotags(out.path()).unwrap(),
            read_geotags(&input).unwrap()
        );
        assert_eq!(nodata_text(out.path()).as_deref(), Some("0"));

        // And it opens as a one-band GeoRaster with the same georeferencing.
        let mut back = GeoRaster::open(out.path(), &Limits::default()).unwrap();
        assert_eq!(back.info().bands, 1);
        assert_eq!(back.info().sample, SampleKind::U8);
        assert_eq!(back.info().geo, geo);
        assert_eq!(back.info().nodata, Some(0.0));
        assert_eq!(back.info().geo.pixel_area_m2(), Some(100.0));
        let again: Vec<u8> = read_all(&mut back).iter().map(|&v| v as u8).collect();
        assert_eq!(again, band0);
    }

    #[test]
    fn f32_band_round_trip_keeps_pixels_nan_and_geotags() {
        let input = fixtures().join("utm_f32_6band_nan.tif");
        let mut src = open("utm_f32_6band_nan.tif");
        let geo = src.info().geo.clone();
        let (w, h) = (src.info().width, src.info().height);
        let all = read_all(&mut src);
        let band2: Vec<f32> = all.chunks_exact(6).map(|p| p[2]).collect();
        assert!(band2.iter().any(|v| v.is_nan()));

        let out = tempfile::NamedTempFile::new().unwrap();
        write_f32_band(
            out.reopen().unwrap(),
            w,
            h,
            &geo,
            Some("nan"),
            &mut |y0, rows| Ok(band2[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec()),
        )
        .unwrap();
        let (ow, oh, pixels, _) = read_back_f32(out.path());
        assert_eq!((ow, oh), (w, h));
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&pixels), bits(&band2));
        assert_eq!(
            read_geotags(out.path()).unwrap(),
            read_geotags(&input).unwrap()
        );
        assert_eq!(nodata_text(out.path()).as_deref(), Some("nan"));

        // The transformation-georeferenced fixture round-trips too.
        let tin = fixtures().join("transform_f64_1band.tif");
        let tgeo = read_geotags(&tin).unwrap();
        let out2 = tempfile::NamedTempFile::new().unwrap();
        write_f32_band(out2.reopen().unwrap(), 3, 2, &tgeo, None, &mut |_, rows| {
            Ok(vec![1.5; rows as usize * 3])
        })
        .unwrap();
        assert_eq!(read_geotags(out2.path()).unwrap(), tgeo);
        assert_eq!(nodata_text(out2.path()), None);
    }

    #[test]
    fn writers_go_strip_by_strip() {
        // A forced strip height: 4 strips of 3 rows and one of 1.
        let (w, h) = (5u32, 13u32);
        let values: Vec<u8> = (0..w * h).map(|v| (v * 7 % 256) as u8).collect();
        let out = tempfile::NamedTempFile::new().unwrap();
        let mut calls = Vec::new();
        write_band::<_, colortype::Gray8>(
            out.reopen().unwrap(),
            w,
            h,
            &GeoTags::default(),
            None,
            Some(3),
            &mut |y0, rows| {
                calls.push((y0, rows));
                Ok(values[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec())
            },
        )
        .unwrap();
        assert_eq!(calls, vec![(0, 3), (3, 3), (6, 3), (9, 3), (12, 1)]);
        let (_, _, pixels, strips) = read_back_u8(out.path());
        assert_eq!(strips, 5);
        assert_eq!(pixels, values);
        assert!(read_geotags(out.path()).unwrap().is_empty());

        // The automatic choice keeps strips near 256 KiB: a 100000-pixel-wide f32 row is
        // 400 kB, so one row per strip.
        assert_eq!(rows_per_strip(400_000, 10), 1);
        assert_eq!(rows_per_strip(40, 30), 30);
        assert_eq!(rows_per_strip(1000, 100_000), 262);
        let (w, h) = (70_000u32, 3u32);
        let out = tempfile::NamedTempFile::new().unwrap();
        let mut calls = Vec::new();
        write_f32_band(
            out.reopen().unwrap(),
            w,
            h,
            &GeoTags::default(),
            None,
            &mut |y0, rows| {
                calls.push((y0, rows));
                Ok((0..rows * w).map(|i| (i + y0 * w) as f32).collect())
            },
        )
        .unwrap();
        assert_eq!(calls, vec![(0, 1), (1, 1), (2, 1)]);
        let (_, _, pixels, strips) = read_back_f32(out.path());
        assert_eq!(strips, 3);
        assert!(pixels.iter().enumerate().all(|(i, &v)| v == i as f32));
    }

    #[test]
    fn writers_refuse_bad_input_without_panicking() {
        let geo = good_geo();
        let mut cur = std::io::Cursor::new(Vec::new());
        // Wrong number of values from the callback.
        let r = write_u8_band(&mut cur, 4, 4, &geo, None, &mut |_, _| Ok(vec![0; 3]));
        assert!(matches!(r, Err(Error::Output { .. })), "{r:?}");
        // The callback's own error comes back unchanged.
        let r = write_f32_band(&mut cur, 4, 4, &geo, None, &mut |_, _| {
            Err(Error::Data("no more rows".into()))
        });
        assert!(
            matches!(r, Err(Error::Data(ref m)) if m == "no more rows"),
            "{r:?}"
        );
        // Empty rasters and bad nodata text.
        let mut ok = |_: u32, rows: u32| Ok(vec![0u8; rows as usize * 4]);
        assert!(write_u8_band(&mut cur, 0, 4, &geo, None, &mut ok).is_err());
        assert!(write_u8_band(&mut cur, 4, 0, &geo, None, &mut ok).is_err());
        assert!(write_u8_band(&mut cur, 4, 4, &geo, Some("zero"), &mut ok).is_err());
        assert!(write_u8_band(&mut cur, 4, 4, &geo, Some("0\0"), &mut ok).is_err());
        let mut bad = geo.clone();
        bad.ascii_params = Some(GeoTagValue::Ascii("Zürich|".into()));
        assert!(write_u8_band(&mut cur, 4, 4, &bad, None, &mut ok).is_err());
        // A sink that refuses to write gives an I/O error.
        struct Full;
        impl Write for Full {
            fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
                Err(std::io::Error::other("disk full"))
            }
            fn flush(&mut self) -> std::io::Result<()> {
                Ok(())
            }
        }
        impl Seek for Full {
            fn seek(&mut self, _: SeekFrom) -> std::io::Result<u64> {
                Ok(0)
            }
        }
        let r = write_u8_band(Full, 4, 4, &geo, None, &mut ok);
        assert!(matches!(r, Err(Error::Io { .. })), "{r:?}");
    }

    /// A little-endian classic TIFF with the given inline-valued entries (tag, type, count,
    /// value), followed by `data_len` zero bytes; StripOffsets/TileOffsets should point at
    /// offset `data_at()`.
    fn tiny_tiff(entries: &[(u16, u16, u32, u32)], data_len: usize) -> Vec<u8> {
        let mut sorted = entries.to_vec();
        sorted.sort_by_key(|e| e.0);
        let mut b = Vec::new();
        b.extend_from_slice(b"II");
        b.extend_from_slice(&42u16.to_le_bytes());
        b.extend_from_slice(&8u32.to_le_bytes());
        b.extend_from_slice(&(sorted.len() as u16).to_le_bytes());
        for (tag, ty, count, value) in sorted {
            b.extend_from_slice(&tag.to_le_bytes());
            b.extend_from_slice(&ty.to_le_bytes());
            b.extend_from_slice(&count.to_le_bytes());
            if ty == 3 && count == 1 {
                b.extend_from_slice(&(value as u16).to_le_bytes());
                b.extend_from_slice(&[0, 0]);
            } else {
                b.extend_from_slice(&value.to_le_bytes());
            }
        }
        b.extend_from_slice(&0u32.to_le_bytes());
        b.resize(b.len() + data_len, 0);
        b
    }

    const DATA_AT: u32 = 512;

    fn strip_tiff(width: u32, height: u32, rows_per_strip: u32, bytes: u32) -> Vec<u8> {
        let mut t = tiny_tiff(
            &[
                (256, 4, 1, width),
                (257, 4, 1, height),
                (258, 3, 1, 8),
                (259, 3, 1, 1),
                (262, 3, 1, 1),
                (273, 4, 1, DATA_AT),
                (277, 3, 1, 1),
                (278, 4, 1, rows_per_strip),
                (279, 4, 1, bytes),
            ],
            0,
        );
        t.resize(DATA_AT as usize + 64, 7);
        t
    }

    fn write_temp(bytes: &[u8]) -> tempfile::NamedTempFile {
        let mut f = tempfile::NamedTempFile::new().unwrap();
        f.write_all(bytes).unwrap();
        f.flush().unwrap();
        f
    }

    #[test]
    fn tiny_tiff_helper_makes_a_readable_file() {
        let f = write_temp(&strip_tiff(8, 8, 8, 64));
        let mut r = GeoRaster::open(f.path(), &Limits::default()).unwrap();
        assert_eq!((r.info().width, r.info().bands), (8, 1));
        assert!(r.read_block(0).unwrap().data.iter().all(|&v| v == 7.0));
        // RowsPerStrip 2^32 - 1 means "all rows in one strip".
        let f = write_temp(&strip_tiff(8, 8, u32::MAX, 64));
        let mut r = GeoRaster::open(f.path(), &Limits::default()).unwrap();
        assert_eq!((r.block_count(), r.block_rows()), (1, 8));
        assert_eq!(r.read_block(0).unwrap().rows, 8);
    }

    #[test]
    fn huge_headers_are_refused_quickly() {
        let start = Instant::now();
        // 100000 x 100000 in one strip: over max_pixels.
        let f = write_temp(&strip_tiff(100_000, 100_000, 100_000, 64));
        let r = GeoRaster::open(f.path(), &Limits::default());
        assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
        // Within max_pixels, but one strip would be 20000 x 20000 x 4 bytes as f32.
        let f = write_temp(&strip_tiff(20_000, 20_000, 20_000, 64));
        let limits = Limits {
            max_pixels: 1 << 40,
            max_alloc: 256 << 20,
            ..Limits::default()
        };
        let r = GeoRaster::open(f.path(), &limits);
        assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
        // A small image claiming enormous tiles.
        let mut t = tiny_tiff(
            &[
                (256, 4, 1, 8),
                (257, 4, 1, 8),
                (258, 3, 1, 8),
                (259, 3, 1, 1),
                (262, 3, 1, 1),
                (277, 3, 1, 1),
                (322, 4, 1, 1 << 30),
                (323, 4, 1, 1 << 30),
                (324, 4, 1, DATA_AT),
                (325, 4, 1, 64),
            ],
            0,
        );
        t.resize(DATA_AT as usize + 64, 0);
        let f = write_temp(&t);
        let r = GeoRaster::open(f.path(), &Limits::default());
        assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
        assert!(
            start.elapsed() < Duration::from_secs(2),
            "{:?}",
            start.elapsed()
        );
    }

    #[test]
    fn truncated_files_give_errors_not_panics() {
        for f in files() {
            let name = f["file"].as_str().unwrap();
            let bytes = std::fs::read(fixtures().join(name)).unwrap();
            let n = bytes.len();
            // Bytes the decoder may never need: the end of a compressed stream (a Deflate
            // checksum, an LZW end code) and the bottom padding rows of the last tile.
            let spare = if f["tiled"] == true {
                200
            } else if f["compression"] != "none" {
                1
            } else {
                0
            };
            for cut in [0, 3, 4, 8, 9, 20, 100, 300, n / 4, n / 2, n - 100, n - 1] {
                let tmp = write_temp(&bytes[..cut]);
                let outcome = GeoRaster::open(tmp.path(), &Limits::default()).and_then(|mut r| {
                    (0..r.block_count()).try_for_each(|i| r.read_block(i).map(|_| ()))
                });
                if cut < n - spare {
                    assert!(
                        outcome.is_err(),
                        "{name} cut at {cut} of {n} read without error"
                    );
                }
                if let Err(e) = outcome {
                    assert!(!e.to_string().is_empty());
                }
            }
        }
    }

    #[test]
    fn corrupt_bytes_give_errors_not_panics() {
        // Tight limits: a corrupted size must not make the test allocate gigabytes.
        let limits = Limits {
            max_pixels: 1 << 20,
            max_alloc: 32 << 20,
            ..Limits::default()
        };
        for name in [
            "utm_u16_4band_strips.tif",
            "utm_u16_4band_planar_tiled_deflate.tif",
            "utm_f32_6band_nan.tif",
        ] {
            let bytes = std::fs::read(fixtures().join(name)).unwrap();
            let tmp = tempfile::NamedTempFile::new().unwrap();
            // The header, the directory and the tag values live in the first ~500 bytes.
            for pos in 0..bytes.len().min(500) {
                for v in [0xffu8, bytes[pos] ^ 0x11] {
                    let mut b = bytes.clone();
                    b[pos] = v;
                    std::fs::write(tmp.path(), &b).unwrap();
                    if let Ok(mut r) = GeoRaster::open(tmp.path(), &limits) {
                        for i in 0..r.block_count() {
                            let _ = r.read_block(i);
                        }
                    }
                    let _ = read_geotags(tmp.path());
                }
            }
        }
    }

    #[test]
    fn png_opens_as_three_bands() {
        let (w, h) = (5u32, 4u32);
        let rgb: Vec<u8> = (0..w * h * 3).map(|i| (i * 11 % 256) as u8).collect();
        let tmp = tempfile::Builder::new().suffix(".png").tempfile().unwrap();
        crate::raster::write_rgb_png(tmp.reopen().unwrap(), w, h, &rgb).unwrap();
        let mut r = GeoRaster::open(tmp.path(), &Limits::default()).unwrap();
        let info = r.info().clone();
        assert_eq!((info.width, info.height, info.bands), (w, h, 3));
        assert_eq!(info.sample, SampleKind::U8);
        assert!(info.geo.is_empty());
        assert_eq!(info.nodata, None);
        assert_eq!(r.block_count(), 1);
        let all = read_all(&mut r);
        assert_eq!(all, rgb.iter().map(|&v| v as f32).collect::<Vec<_>>());
        // Limits apply to non-TIFF input too.
        let r = GeoRaster::open(tmp.path(), &Limits::with_max_pixels(10));
        assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
    }

    #[test]
    fn missing_folders_and_non_images_are_clear_errors() {
        let r = GeoRaster::open(&fixtures().join("no-such-file.tif"), &Limits::default());
        assert!(matches!(r, Err(Error::Open { .. })), "{r:?}");
        let r = GeoRaster::open(&fixtures(), &Limits::default());
        assert!(matches!(r, Err(Error::Decode { .. })), "{r:?}");
        let r = GeoRaster::open(&fixtures().join("expected.json"), &Limits::default());
        assert!(matches!(r, Err(Error::Decode { .. })), "{r:?}");
        let empty = write_temp(b"");
        assert!(GeoRaster::open(empty.path(), &Limits::default()).is_err());
        let r = read_geotags(&fixtures().join("expected.json"));
        assert!(matches!(r, Err(Error::Decode { .. })), "{r:?}");
        // Sample types outside the supported set: 4-bit grey.
        let mut t = strip_tiff(8, 8, 8, 32);
        let at = t.windows(4).position(|w| w == [2, 1, 3, 0]).unwrap(); // BitsPerSample entry
        t[at + 8] = 4;
        let f = write_temp(&t);
        let r = GeoRaster::open(f.path(), &Limits::default());
        assert!(matches!(r, Err(Error::Unsupported { .. })), "{r:?}");
    }
}
