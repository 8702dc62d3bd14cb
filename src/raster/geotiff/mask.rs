//! What is not there: GDAL masks (inside the file, as an image marked "transparency mask" by
//! NewSubfileType bit 2, or beside it as `NAME.msk`), and rasters of pixels to leave out
//! (for example clouds) on the same grid.
//!
//! A GDAL mask is 0 where there is no data and non-zero where there is. It is read with the
//! `tiff` decoder, its PhotometricInterpretation 4 (transparency mask) shown to the decoder
//! as 1 (BlackIsZero, one bit per pixel), which it decodes.

use super::decoder::{decode, read_up_to, tiff_decoder, tiff_error, unsupported, PatchedReader};
use crate::error::Result;
use crate::limits::Limits;
use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use tiff::decoder::{ChunkType, Decoder, DecodingResult};
use tiff::tags::Tag;

/// One image directory of a TIFF, as far as the mask search needs it.
#[derive(Debug, Clone, Copy)]
pub(super) struct IfdSummary {
    pub(super) new_subfile_type: u32,
    /// File offset of the inline PhotometricInterpretation value, and the value.
    pub(super) photometric: Option<(u64, u16)>,
}

/// Walks the chain of top-level image directories (at most 64).
pub(super) fn ifd_chain(path: &Path) -> Option<Vec<IfdSummary>> {
    let mut f = BufReader::new(File::open(path).ok()?);
    let mut head = [0u8; 16];
    if read_up_to(&mut f, &mut head).ok()? < 8 {
        return None;
    }
    let be = match &head[..2] {
        b"II" => false,
        b"MM" => true,
        _ => return None,
    };
    let num = |b: &[u8]| -> u64 {
        let mut v = 0u64;
        for (i, &x) in b.iter().enumerate() {
            let shift = if be { (b.len() - 1 - i) * 8 } else { i * 8 };
            v |= (x as u64) << shift;
        }
        v
    };
    let big = match num(&head[2..4]) {
        42 => false,
        43 => true,
        _ => return None,
    };
    let mut next = if big {
        num(&head[8..16])
    } else {
        num(&head[4..8])
    };
    let mut out = Vec::new();
    while next != 0 && out.len() < 64 {
        f.seek(SeekFrom::Start(next)).ok()?;
        let count_len = if big { 8 } else { 2 };
        let mut c = [0u8; 8];
        f.read_exact(&mut c[..count_len]).ok()?;
        let entries = num(&c[..count_len]).min(4096);
        let (entry_len, value_at) = if big { (20u64, 12u64) } else { (12, 8) };
        let first = next + count_len as u64;
        let mut summary = IfdSummary {
            new_subfile_type: 0,
            photometric: None,
        };
        let mut e = [0u8; 20];
        for k in 0..entries {
            f.read_exact(&mut e[..entry_len as usize]).ok()?;
            let tag = num(&e[0..2]);
            let ty = num(&e[2..4]);
            let v = &e[value_at as usize..];
            let value = match ty {
                3 => num(&v[..2]),
                4 => num(&v[..4]),
                _ => continue,
            };
            match tag {
                254 => summary.new_subfile_type = value as u32,
                262 if ty == 3 => {
                    summary.photometric = Some((first + k * entry_len + value_at, value as u16))
                }
                _ => {}
            }
        }
        let mut n = [0u8; 8];
        let nl = if big { 8 } else { 4 };
        f.read_exact(&mut n[..nl]).ok()?;
        next = num(&n[..nl]);
        out.push(summary);
    }
    Some(out)
}

/// The value 1 as a SHORT in the byte order of the TIFF at `path`.
pub(super) fn one_bytes(path: &Path) -> Option<[u8; 2]> {
    let mut f = File::open(path).ok()?;
    let mut b = [0u8; 2];
    f.read_exact(&mut b).ok()?;
    Some(if &b == b"MM" { [0, 1] } else { [1, 0] })
}

/// A GDAL mask read chunk by chunk: which pixels of a row range hold data.
pub(super) struct MaskSource {
    path: PathBuf,
    decoder: Decoder<PatchedReader<BufReader<File>>>,
    chunk_w: u32,
    chunk_h: u32,
    across: u32,
    /// Bits per mask value (1 or 8).
    bits: u8,
    /// Mask values of the last chunk-row decoded: (its index, width × chunk_h bytes, 0 or 1).
    cache: Option<(u32, Vec<u8>)>,
    /// Where the mask was found, in words (`"internal"`, `"NAME.msk"`).
    pub(super) origin: String,
}

impl MaskSource {
    /// The mask of the raster at `path` (`width × height`): an internal one, else `PATH.msk`
    /// beside it; `None` when there is neither.
    pub(super) fn find(
        path: &Path,
        width: u32,
        height: u32,
        limits: &Limits,
    ) -> Result<Option<MaskSource>> {
        let chain = ifd_chain(path).unwrap_or_default();
        // NewSubfileType bit 2 (4) = transparency mask; bit 0 (1) = reduced resolution.
        if let Some((index, ifd)) = chain
            .iter()
            .enumerate()
            .skip(1)
            .find(|(_, s)| s.new_subfile_type & 4 != 0 && s.new_subfile_type & 1 == 0)
        {
            return MaskSource::open(path, index, ifd, width, height, limits, "internal".into())
                .map(Some);
        }
        let mut msk = path.as_os_str().to_owned();
        msk.push(".msk");
        let msk = PathBuf::from(msk);
        if !msk.is_file() {
            return Ok(None);
        }
        let chain = ifd_chain(&msk).ok_or_else(|| decode(&msk, "not a TIFF mask file"))?;
        let origin = msk
            .file_name()
            .map_or("mask".into(), |n| n.to_string_lossy().into_owned());
        MaskSource::open(&msk, 0, &chain[0], width, height, limits, origin).map(Some)
    }

    fn open(
        path: &Path,
        index: usize,
        ifd: &IfdSummary,
        width: u32,
        height: u32,
        limits: &Limits,
        origin: String,
    ) -> Result<MaskSource> {
        let patch = match (ifd.photometric, one_bytes(path)) {
            (Some((at, 4)), Some(one)) => Some((at, one)),
            _ => None,
        };
        let mut decoder = tiff_decoder(path, patch, limits)?;
        decoder
            .seek_to_image(index)
            .map_err(|e| tiff_error(path, e))?;
        let (w, h) = decoder.dimensions().map_err(|e| tiff_error(path, e))?;
        if (w, h) != (width, height) {
            return Err(decode(
                path,
                format!("the mask is {w} x {h} pixels but the raster is {width} x {height}"),
            ));
        }
        let samples: u16 = decoder
            .find_tag_unsigned(Tag::SamplesPerPixel)
            .map_err(|e| tiff_error(path, e))?
            .unwrap_or(1);
        if samples != 1 {
            return Err(unsupported(
                path,
                format!("a mask with {samples} samples per pixel"),
            ));
        }
        let bits = decoder
            .colortype()
            .map_err(|e| tiff_error(path, e))?
            .bit_depth();
        if bits != 1 && bits != 8 {
            return Err(unsupported(
                path,
                format!("a {bits}-bit mask (1 or 8 bits expected)"),
            ));
        }
        let (cw, ch) = decoder.chunk_dimensions();
        let tiled = decoder.get_chunk_type() == ChunkType::Tile;
        let (chunk_w, chunk_h) = if tiled {
            (cw, ch)
        } else {
            (width, ch.min(height))
        };
        if chunk_w == 0 || chunk_h == 0 {
            return Err(decode(path, "mask strips or tiles have zero size"));
        }
        Ok(MaskSource {
            path: path.into(),
            decoder,
            chunk_w,
            chunk_h,
            across: width.div_ceil(chunk_w),
            bits,
            cache: None,
            origin,
        })
    }

    fn chunk_row(&mut self, i: u32, width: u32) -> Result<&[u8]> {
        if self.cache.as_ref().map(|c| c.0) != Some(i) {
            let mut out = vec![0u8; width as usize * self.chunk_h as usize];
            for c in 0..self.across {
                let chunk = i * self.across + c;
                let x0 = (c * self.chunk_w) as usize;
                let src_w = (self.chunk_w as usize).min(width as usize - x0);
                let decoder = &mut self.decoder;
                let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                    decoder.read_chunk(chunk)
                }))
                .map_err(|_| {
                    decode(
                        &self.path,
                        format!("the mask's strip/tile {chunk} is corrupt"),
                    )
                })?
                .map_err(|e| tiff_error(&self.path, e))?;
                let DecodingResult::U8(v) = r else {
                    return Err(unsupported(&self.path, "a mask that is not 1- or 8-bit"));
                };
                // Rows of the decoded chunk: 1 bit per pixel (rows padded to a byte) or 8.
                let bits = self.bits == 1;
                let row_len = if bits { src_w.div_ceil(8) } else { src_w };
                let rows = (v.len() / row_len.max(1)).min(self.chunk_h as usize);
                for r in 0..rows {
                    let src = &v[r * row_len..(r + 1) * row_len];
                    let dst = &mut out[r * width as usize + x0..r * width as usize + x0 + src_w];
                    for (x, d) in dst.iter_mut().enumerate() {
                        *d = if bits {
                            (src[x / 8] >> (7 - x % 8)) & 1
                        } else {
                            (src[x] != 0) as u8
                        };
                    }
                }
            }
            self.cache = Some((i, out));
        }
        Ok(&self.cache.as_ref().map(|c| &c.1).expect("filled above")[..])
    }

    /// Clears (sets to NaN) every band of the pixels of rows `y0 .. y0 + rows` that the mask
    /// marks as holding no data, in a pixel-interleaved block of `bands` bands.
    pub(super) fn apply(
        &mut self,
        y0: u32,
        rows: u32,
        width: u32,
        bands: usize,
        data: &mut [f32],
    ) -> Result<()> {
        for y in y0..y0 + rows {
            let i = y / self.chunk_h;
            let within = (y - i * self.chunk_h) as usize * width as usize;
            let w = width as usize;
            let line = self.chunk_row(i, width)?[within..within + w].to_vec();
            let base = (y - y0) as usize * w * bands;
            for (x, &m) in line.iter().enumerate() {
                if m == 0 {
                    data[base + x * bands..base + (x + 1) * bands].fill(f32::NAN);
                }
            }
        }
        Ok(())
    }
}
