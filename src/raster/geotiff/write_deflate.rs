//! DEFLATE-compressed strips. The `tiff` crate compresses only through its whole-image
//! `write_data`, so strips written one at a time are compressed here (zlib stream, RFC 1950,
//! by `miniz_oxide`; TIFF compression 8 as GDAL writes it), after the horizontal predictor
//! (TIFF 6.0 §14) for integer samples, and written with the directory encoder.

use super::tags::GeoTags;
use super::write_common::{
    check_strip, colour_map, write_geo_tags, writer_error, NativeBytes, WriteOptions, OUTPUT_NAME,
};
use crate::error::{Error, Result};
use std::io::{Seek, Write};
use tiff::encoder::colortype::ColorType;
use tiff::encoder::{TiffEncoder, TiffKind};
use tiff::tags::{SampleFormat, Tag};

#[allow(clippy::too_many_arguments)]
pub(super) fn write_deflate<W, C, K>(
    mut encoder: TiffEncoder<W, K>,
    width: u32,
    height: u32,
    geo: &GeoTags,
    nodata: Option<&str>,
    rows_per_strip: u32,
    opts: &WriteOptions,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<C::Inner>>,
) -> Result<()>
where
    W: Write + Seek,
    C: ColorType,
    C::Inner: NativeBytes,
    K: TiffKind,
{
    let sample_bytes = std::mem::size_of::<C::Inner>();
    let float = C::SAMPLE_FORMAT[0] == SampleFormat::IEEEFP;
    let predict = !float && sample_bytes == 1;
    let mut dir = encoder.image_directory().map_err(writer_error)?;
    let mut offsets: Vec<u64> = Vec::new();
    let mut counts: Vec<u64> = Vec::new();
    let mut raw: Vec<u8> = Vec::new();
    let mut y0 = 0u32;
    while y0 < height {
        let rows = rows_per_strip.min(height - y0);
        let values = next_rows(y0, rows)?;
        check_strip(y0, rows, width, values.len())?;
        raw.clear();
        for &v in &values {
            v.extend_bytes(&mut raw);
        }
        if predict {
            // Horizontal differencing per row, modulo 256 (8-bit samples).
            for row in raw.chunks_exact_mut(width as usize) {
                for x in (1..row.len()).rev() {
                    row[x] = row[x].wrapping_sub(row[x - 1]);
                }
            }
        }
        let packed = miniz_oxide::deflate::compress_to_vec_zlib(&raw, 6);
        let at = dir.write_data(&packed[..]).map_err(writer_error)?;
        offsets.push(at);
        counts.push(packed.len() as u64);
        y0 += rows;
    }
    let bits = (sample_bytes * 8) as u16;
    dir.write_tag(Tag::ImageWidth, width)
        .map_err(writer_error)?;
    dir.write_tag(Tag::ImageLength, height)
        .map_err(writer_error)?;
    dir.write_tag(Tag::BitsPerSample, bits)
        .map_err(writer_error)?;
    dir.write_tag(Tag::Compression, 8u16)
        .map_err(writer_error)?;
    let photometric: u16 = if opts.colour_map.is_some() { 3 } else { 1 };
    dir.write_tag(Tag::PhotometricInterpretation, photometric)
        .map_err(writer_error)?;
    dir.write_tag(Tag::SamplesPerPixel, 1u16)
        .map_err(writer_error)?;
    dir.write_tag(Tag::RowsPerStrip, rows_per_strip)
        .map_err(writer_error)?;
    dir.write_tag(Tag::PlanarConfiguration, 1u16)
        .map_err(writer_error)?;
    dir.write_tag(Tag::SampleFormat, if float { 3u16 } else { 1u16 })
        .map_err(writer_error)?;
    dir.write_tag(Tag::Predictor, if predict { 2u16 } else { 1u16 })
        .map_err(writer_error)?;
    let to_k = |v: &[u64]| -> Result<Vec<K::OffsetType>> {
        v.iter()
            .map(|&o| K::convert_offset(o).map_err(writer_error))
            .collect()
    };
    let (o, c) = (to_k(&offsets)?, to_k(&counts)?);
    dir.write_tag(Tag::StripOffsets, K::convert_slice(&o))
        .map_err(writer_error)?;
    dir.write_tag(Tag::StripByteCounts, K::convert_slice(&c))
        .map_err(writer_error)?;
    if let Some(colours) = &opts.colour_map {
        if sample_bytes != 1 {
            return Err(Error::output(
                OUTPUT_NAME,
                "a colour table needs an 8-bit band",
            ));
        }
        dir.write_tag(Tag::ColorMap, &colour_map(colours)[..])
            .map_err(writer_error)?;
    }
    write_geo_tags(&mut dir, geo, nodata)?;
    dir.finish().map_err(writer_error)
}
