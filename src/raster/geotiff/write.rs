//! Writing single-band GeoTIFFs strip by strip, with the source's GeoTIFF tags and an
//! optional GDAL_NODATA value; on request DEFLATE-compressed (with the horizontal predictor
//! for integers), as BigTIFF, and with a colour table (PhotometricInterpretation palette).

use super::tags::{geo_tag_name, parse_nodata, GeoTagValue, GeoTags};
use super::write_common::{
    check_strip, colour_map, write_geo_tags, writer_error, NativeBytes, WriteOptions, OUTPUT_NAME,
};
use crate::error::{Error, Result};
use std::io::{Seek, Write};
use tiff::encoder::colortype;
use tiff::encoder::{TiffEncoder, TiffKind, TiffKindBig, TiffKindStandard};
use tiff::tags::Tag;

/// Target size of one written strip, in bytes (the writer holds one strip at a time).
const STRIP_TARGET_BYTES: u64 = 256 * 1024;

/// Rows per strip for a row of `row_bytes` bytes: strips of about 256 KiB, at least one row.
pub(super) fn rows_per_strip(row_bytes: u64, height: u32) -> u32 {
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

#[allow(clippy::too_many_arguments)]
pub(super) fn write_band<W, C>(
    w: W,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    strip_rows: Option<u32>,
    opts: &WriteOptions,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<C::Inner>>,
) -> Result<()>
where
    W: Write + Seek,
    C: colortype::ColorType,
    C::Inner: NativeBytes,
    [C::Inner]: tiff::encoder::TiffValue,
{
    if opts.big {
        let encoder = TiffEncoder::new_big(w).map_err(writer_error)?;
        write_with::<W, C, TiffKindBig>(
            encoder, width, height, geo, nodata, strip_rows, opts, next_rows,
        )
    } else {
        let encoder = TiffEncoder::new(w).map_err(writer_error)?;
        write_with::<W, C, TiffKindStandard>(
            encoder, width, height, geo, nodata, strip_rows, opts, next_rows,
        )
    }
}

#[allow(clippy::too_many_arguments)]
fn write_with<W, C, K>(
    encoder: TiffEncoder<W, K>,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    strip_rows: Option<u32>,
    opts: &WriteOptions,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<C::Inner>>,
) -> Result<()>
where
    W: Write + Seek,
    C: colortype::ColorType,
    C::Inner: NativeBytes,
    K: TiffKind,
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

    if opts.deflate {
        return super::write_deflate::write_deflate::<W, C, K>(
            encoder, width, height, geo, nodata, rps, opts, next_rows,
        );
    }
    let mut encoder = encoder;
    let mut image = encoder
        .new_image::<C>(width, height)
        .map_err(writer_error)?;
    image.rows_per_strip(rps).map_err(writer_error)?;
    {
        let dir = image.encoder();
        if let Some(colours) = &opts.colour_map {
            if std::mem::size_of::<C::Inner>() != 1 {
                return Err(Error::output(
                    OUTPUT_NAME,
                    "a colour table needs an 8-bit band",
                ));
            }
            dir.write_tag(Tag::PhotometricInterpretation, 3u16)
                .map_err(writer_error)?;
            dir.write_tag(Tag::ColorMap, &colour_map(colours)[..])
                .map_err(writer_error)?;
        }
        write_geo_tags(dir, geo, nodata)?;
    }
    let mut y0 = 0u32;
    while y0 < height {
        let rows = rps.min(height - y0);
        let values = next_rows(y0, rows)?;
        check_strip(y0, rows, width, values.len())?;
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
    write_band::<W, colortype::Gray8>(
        w,
        width,
        height,
        geo,
        nodata,
        None,
        &WriteOptions::default(),
        next_rows,
    )
}

/// Writes a single-band 8-bit GeoTIFF as [`write_u8_band`] does, with `opts` (compression,
/// BigTIFF, colour table).
pub fn write_u8_band_with<W: Write + Seek>(
    w: W,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    opts: &WriteOptions,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<u8>>,
) -> Result<()> {
    write_band::<W, colortype::Gray8>(w, width, height, geo, nodata, None, opts, next_rows)
}

/// Writes a single-band 32-bit float GeoTIFF as [`write_f32_band`] does, with `opts`
/// (compression without predictor, BigTIFF; no colour table).
pub fn write_f32_band_with<W: Write + Seek>(
    w: W,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    opts: &WriteOptions,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<f32>>,
) -> Result<()> {
    write_band::<W, colortype::Gray32Float>(w, width, height, geo, nodata, None, opts, next_rows)
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
    write_band::<W, colortype::Gray32Float>(
        w,
        width,
        height,
        geo,
        nodata,
        None,
        &WriteOptions::default(),
        next_rows,
    )
}
