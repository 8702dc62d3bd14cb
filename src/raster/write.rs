//! Writing PNG (indexed, RGB, RGBA, grey; with a colour profile, EXIF and resolution when
//! given) and single-band float TIFF outputs.

use std::io::{Seek, Write};

fn png_error(e: png::EncodingError) -> std::io::Error {
    match e {
        png::EncodingError::IoError(io) => io,
        other => std::io::Error::other(other.to_string()),
    }
}

/// Metadata a written PNG carries: colour profile (iCCP), EXIF (eXIf) and resolution
/// (pHYs, in pixels per metre).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PngExtras<'a> {
    pub icc_profile: Option<&'a [u8]>,
    pub exif: Option<&'a [u8]>,
    pub dpi: Option<f64>,
}

fn encoder_with<W: Write>(
    w: W,
    width: u32,
    height: u32,
    extras: &PngExtras<'_>,
) -> png::Encoder<'static, W> {
    let mut info = png::Info::with_size(width, height);
    info.icc_profile = extras
        .icc_profile
        .map(|p| std::borrow::Cow::Owned(p.to_vec()));
    // PNG's eXIf holds the TIFF structure alone, without JPEG's `Exif\0\0` prefix.
    info.exif_metadata = extras
        .exif
        .map(|e| std::borrow::Cow::Owned(e.strip_prefix(b"Exif\0\0").unwrap_or(e).to_vec()));
    info.pixel_dims = png_pixel_dims(extras.dpi);
    png::Encoder::with_info(w, info).expect("an Info of a fresh image is valid")
}

/// Writes an indexed (palette) PNG; `transparent` marks one palette index as fully
/// transparent through a tRNS chunk.
pub fn write_indexed_png<W: Write>(
    w: W,
    width: u32,
    height: u32,
    palette: &[[u8; 3]],
    transparent: Option<u8>,
    indices: &[u8],
) -> std::io::Result<()> {
    write_indexed_png_with(
        w,
        width,
        height,
        palette,
        transparent,
        indices,
        &PngExtras::default(),
    )
}

/// As [`write_indexed_png`], with metadata.
pub fn write_indexed_png_with<W: Write>(
    w: W,
    width: u32,
    height: u32,
    palette: &[[u8; 3]],
    transparent: Option<u8>,
    indices: &[u8],
    extras: &PngExtras<'_>,
) -> std::io::Result<()> {
    let mut enc = encoder_with(w, width, height, extras);
    enc.set_compression(png::Compression::Fast);
    enc.set_color(png::ColorType::Indexed);
    let bits = match palette.len() {
        0..=2 => png::BitDepth::One,
        3..=4 => png::BitDepth::Two,
        5..=16 => png::BitDepth::Four,
        _ => png::BitDepth::Eight,
    };
    enc.set_depth(bits);
    enc.set_palette(palette.iter().flatten().copied().collect::<Vec<u8>>());
    if let Some(t) = transparent {
        let mut trns = vec![255u8; t as usize + 1];
        trns[t as usize] = 0;
        enc.set_trns(trns);
    }
    let mut writer = enc.write_header().map_err(png_error)?;
    let per = match bits {
        png::BitDepth::One => 8,
        png::BitDepth::Two => 4,
        png::BitDepth::Four => 2,
        _ => 1,
    };
    let packed = match per {
        8 => pack_indices::<8>(indices, width as usize),
        4 => pack_indices::<4>(indices, width as usize),
        2 => pack_indices::<2>(indices, width as usize),
        _ => pack_indices::<1>(indices, width as usize),
    };
    writer.write_image_data(&packed).map_err(png_error)?;
    writer.finish().map_err(png_error)
}

/// Packs `PER` indices into each byte, the first in the highest bits, every row starting
/// on a new byte (the PNG layout for bit depths below 8).
fn pack_indices<const PER: usize>(indices: &[u8], width: usize) -> Vec<u8> {
    let shift = 8 / PER;
    let row_bytes = width.div_ceil(PER);
    let mut packed = vec![0u8; row_bytes * (indices.len() / width.max(1))];
    if width == 0 {
        return packed;
    }
    for (out, row) in packed
        .chunks_exact_mut(row_bytes)
        .zip(indices.chunks_exact(width))
    {
        for (byte, px) in out.iter_mut().zip(row.chunks(PER)) {
            let mut b = 0u8;
            for (j, &v) in px.iter().enumerate() {
                b |= v << ((PER - 1 - j) * shift);
            }
            *byte = b;
        }
    }
    packed
}

/// Writes an 8-bit RGBA PNG.
pub fn write_rgba_png<W: Write>(w: W, width: u32, height: u32, rgba: &[u8]) -> std::io::Result<()> {
    write_rgba_png_with(w, width, height, rgba, &PngExtras::default())
}

/// As [`write_rgba_png`], with metadata.
pub fn write_rgba_png_with<W: Write>(
    w: W,
    width: u32,
    height: u32,
    rgba: &[u8],
    extras: &PngExtras<'_>,
) -> std::io::Result<()> {
    write_png8(w, width, height, png::ColorType::Rgba, rgba, extras)
}

/// Writes an 8-bit RGB PNG.
pub fn write_rgb_png<W: Write>(w: W, width: u32, height: u32, rgb: &[u8]) -> std::io::Result<()> {
    write_png8(
        w,
        width,
        height,
        png::ColorType::Rgb,
        rgb,
        &PngExtras::default(),
    )
}

/// Writes an 8-bit greyscale PNG.
pub fn write_grey_png<W: Write>(w: W, width: u32, height: u32, grey: &[u8]) -> std::io::Result<()> {
    write_png8(
        w,
        width,
        height,
        png::ColorType::Grayscale,
        grey,
        &PngExtras::default(),
    )
}

/// The one 8-bit PNG writer behind the three above. Fast deflate: noisy uncertainty maps
/// and photographs compress poorly at any level, and the default level takes about 20
/// times as long for a few per cent (measured on a 12 MP photo).
fn write_png8<W: Write>(
    w: W,
    width: u32,
    height: u32,
    colour: png::ColorType,
    data: &[u8],
    extras: &PngExtras<'_>,
) -> std::io::Result<()> {
    let mut enc = encoder_with(w, width, height, extras);
    enc.set_compression(png::Compression::Fast);
    enc.set_color(colour);
    enc.set_depth(png::BitDepth::Eight);
    let mut writer = enc.write_header().map_err(png_error)?;
    writer.write_image_data(data).map_err(png_error)?;
    writer.finish().map_err(png_error)
}

/// Writes a single-band 32-bit float TIFF.
pub fn write_f32_tiff<W: Write + Seek>(
    w: W,
    width: u32,
    height: u32,
    data: &[f32],
) -> std::io::Result<()> {
    let mut enc = tiff::encoder::TiffEncoder::new(w).map_err(tiff_error)?;
    enc.write_image::<tiff::encoder::colortype::Gray32Float>(width, height, data)
        .map_err(tiff_error)
}

fn tiff_error(e: tiff::TiffError) -> std::io::Error {
    match e {
        tiff::TiffError::IoError(io) => io,
        other => std::io::Error::other(other.to_string()),
    }
}

/// A print resolution as PNG records it (pHYs: whole pixels per metre); none for a missing
/// or meaningless one.
pub(crate) fn png_pixel_dims(dpi: Option<f64>) -> Option<png::PixelDimensions> {
    dpi.filter(|d| d.is_finite() && *d > 0.0).map(|d| {
        let ppm = (d / 0.0254).round().clamp(1.0, u32::MAX as f64) as u32;
        png::PixelDimensions {
            xppu: ppm,
            yppu: ppm,
            unit: png::Unit::Meter,
        }
    })
}
