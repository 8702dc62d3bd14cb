//! Reading one block: the strips or tiles of a TIFF block decoded, cropped and converted to
//! `f32` samples in pixel-interleaved order, or the single block of a decoded image.

use super::decoder::{decode, over_limit, tiff_error, PatchedReader};
use super::mask::MaskSource;
use super::types::{Block, RasterInfo, SampleKind};
use crate::error::Result;
use std::fs::File;
use std::io::BufReader;
use std::path::Path;
use tiff::decoder::{Decoder, DecodingResult};

pub(super) struct TiffSource {
    pub(super) decoder: Decoder<PatchedReader<BufReader<File>>>,
    /// Width of a strip (the image width) or of a tile, in pixels.
    pub(super) chunk_w: u32,
    /// Rows per block: rows per strip (at most the height) or the tile height.
    pub(super) chunk_h: u32,
    /// Chunks across one block (1 for strips).
    pub(super) across: u32,
    /// Number of blocks.
    pub(super) down: u32,
    /// Set after the decoder failed in a way that may leave it unusable.
    pub(super) poisoned: bool,
    /// Byte offset and byte count of every strip or tile; a chunk with either 0 is left out
    /// of the file (GDAL's sparse files) and reads as no data.
    pub(super) chunks: Vec<(u64, u64)>,
    /// Samples per pixel stored, alpha included.
    pub(super) stored_bands: usize,
    /// The stored sample (0-based) that is alpha: not a band, and 0 means no data.
    pub(super) alpha: Option<usize>,
    /// A GDAL mask, inside the file or beside it.
    pub(super) mask: Option<Box<MaskSource>>,
}

pub(super) fn image_block(d: &crate::raster::Decoded) -> Block {
    // A fully transparent pixel is not there: no data, as alpha 0 in a TIFF.
    let rgb = |r: u16, g: u16, b: u16, a: u16| {
        if a == 0 {
            [f32::NAN; 3]
        } else {
            [r as f32, g as f32, b as f32]
        }
    };
    let data: Vec<f32> = match &d.pixels {
        crate::raster::Pixels::Rgba8(p) => p
            .chunks_exact(4)
            .flat_map(|c| rgb(c[0].into(), c[1].into(), c[2].into(), c[3].into()))
            .collect(),
        crate::raster::Pixels::Rgba16(p) => p
            .chunks_exact(4)
            .flat_map(|c| rgb(c[0], c[1], c[2], c[3]))
            .collect(),
    };
    Block {
        y0: 0,
        rows: d.height,
        data,
    }
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

pub(super) fn read_tiff_block(
    path: &Path,
    info: &RasterInfo,
    t: &mut TiffSource,
    i: u32,
) -> Result<Block> {
    if t.poisoned {
        return Err(decode(
            path,
            "an earlier read failed inside the TIFF decoder; reopen the file",
        ));
    }
    let y0 = i * t.chunk_h;
    let rows = t.chunk_h.min(info.height - y0);
    let width = info.width as usize;
    let bands = t.stored_bands;
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
            if matches!(t.chunks.get(chunk as usize), Some(&(0, _) | &(_, 0))) {
                // Left out of the file: no data.
                for r in 0..rows as usize {
                    for x in x0..x0 + src_w {
                        let px = &mut data[(r * width + x) * bands..(r * width + x + 1) * bands];
                        if info.planar {
                            px[plane] = f32::NAN;
                        } else {
                            px.fill(f32::NAN);
                        }
                    }
                }
                continue;
            }
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
    if let Some(a) = t.alpha {
        for px in data.chunks_exact_mut(bands) {
            if px[a] == 0.0 {
                px.fill(f32::NAN);
            }
        }
    }
    if let Some(mask) = t.mask.as_mut() {
        mask.apply(y0, rows, info.width, bands, &mut data)?;
    }
    if let Some(a) = t.alpha {
        // Drop the alpha sample: pixel-interleaved bands without it, in place.
        let mut w = 0;
        for i in 0..data.len() {
            if i % bands != a {
                data[w] = data[i];
                w += 1;
            }
        }
        data.truncate(w);
    }
    Ok(Block { y0, rows, data })
}
