//! What the GeoTIFF writers share: the write options, the BigTIFF decision, the colour
//! table, the GeoTIFF tags and the error wording.

use super::tags::{GeoTagValue, GeoTags, TAG_GDAL_NODATA};
use crate::error::{Error, Result};
use std::io::{Seek, Write};
use tiff::encoder::TiffKind;
use tiff::tags::Tag;
use tiff::TiffError;

/// Name used in error messages about the output of the writers (which see only a stream);
/// a caller that knows the file may put its path in place of this name.
pub const OUTPUT_NAME: &str = "GeoTIFF output";

/// Refuses a strip whose row source handed back `got` values for `rows` rows of `width`
/// starting at `y0`.
pub(super) fn check_strip(y0: u32, rows: u32, width: u32, got: usize) -> Result<()> {
    let expected = rows as usize * width as usize;
    if got == expected {
        return Ok(());
    }
    Err(Error::output(
        OUTPUT_NAME,
        format!(
            "rows {y0}..{} came with {got} values; {expected} ({rows} rows x {width}) were expected",
            y0 + rows
        ),
    ))
}

pub(super) fn writer_error(e: TiffError) -> Error {
    match e {
        TiffError::IoError(source) => Error::io(OUTPUT_NAME, source),
        other => Error::output(OUTPUT_NAME, format!("cannot write GeoTIFF: {other}")),
    }
}

/// How a band is written.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct WriteOptions {
    /// BigTIFF (64-bit offsets) rather than classic TIFF; see [`bigtiff_needed`].
    pub big: bool,
    /// DEFLATE compression (with the horizontal predictor for integer samples).
    pub deflate: bool,
    /// A colour table for 8-bit bands (TIFF ColorMap, PhotometricInterpretation palette):
    /// the colour of each value; values past the list are black.
    pub colour_map: Option<Vec<[u8; 3]>>,
}

/// Classic TIFF stores offsets in 32 bits, so a file must stay under 4 GiB. Whether a band
/// of `width × height` samples of `sample_bytes` needs BigTIFF, decided from its
/// uncompressed size before anything is written: above `limit` bytes (DEFLATE may, rarely,
/// grow data slightly, so the limit keeps a margin: [`BIGTIFF_ABOVE`]).
pub fn bigtiff_needed(width: u32, height: u32, sample_bytes: u32, limit: u64) -> bool {
    (width as u64) * (height as u64) * (sample_bytes as u64) > limit
}

/// The size above which [`bigtiff_needed`] asks for BigTIFF by default: 3.75 GiB, leaving
/// room under 4 GiB for the directory, the tags and DEFLATE's worst-case growth.
pub const BIGTIFF_ABOVE: u64 = 15 * (1 << 28);

/// TIFF 6.0 §5 ColorMap: 3 × 256 SHORTs, all reds, then greens, then blues, 0..65535.
pub(super) fn colour_map(colours: &[[u8; 3]]) -> Vec<u16> {
    let mut map = vec![0u16; 3 * 256];
    for (i, c) in colours.iter().take(256).enumerate() {
        for (k, &v) in c.iter().enumerate() {
            map[k * 256 + i] = v as u16 * 257;
        }
    }
    map
}

/// Writes the GeoTIFF tags and GDAL_NODATA into a directory.
pub(super) fn write_geo_tags<W: Write + Seek, K: TiffKind>(
    dir: &mut tiff::encoder::DirectoryEncoder<'_, W, K>,
    geo: &GeoTags,
    nodata: Option<&str>,
) -> Result<()> {
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
    Ok(())
}

/// Bytes of one sample in native order (the order the `tiff` crate's header declares).
pub(super) trait NativeBytes: Copy {
    fn extend_bytes(self, out: &mut Vec<u8>);
}
impl NativeBytes for u8 {
    fn extend_bytes(self, out: &mut Vec<u8>) {
        out.push(self);
    }
}
impl NativeBytes for f32 {
    fn extend_bytes(self, out: &mut Vec<u8>) {
        out.extend_from_slice(&self.to_ne_bytes());
    }
}
