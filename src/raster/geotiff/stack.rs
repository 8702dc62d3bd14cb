//! Band stacks: one scene from several rasters on one grid (sensors often ship one file per
//! band), and the entry point that opens a raster or a stack.

use super::decoder::{decode, over_limit};
use super::open::GeoRaster;
use super::open::MAX_BANDS;
use super::types::Block;
use crate::error::Result;
use crate::limits::Limits;
use std::io::Read;
use std::path::{Path, PathBuf};

impl GeoRaster {
    /// Opens a raster (see [`GeoRaster::open_single`] for the formats), or a band stack: a
    /// text file `*.stack` listing rasters on one grid (see [`open_stack`]).
    pub fn open(path: &Path, limits: &Limits) -> Result<GeoRaster> {
        if is_stack(path) {
            open_stack(path, limits)
        } else {
            GeoRaster::open_single(path, limits)
        }
    }

    /// A block of a band stack: this raster's bands, then each stacked raster's, with every
    /// file's own no-data value turned into NaN (the stack's no-data).
    pub(super) fn stack_bands(&mut self, b: Block) -> Result<Block> {
        let (w, total) = (self.info.width as usize, self.info.bands);
        let first = b.data.len() / (b.rows as usize * w).max(1);
        let mut out = vec![f32::NAN; b.rows as usize * w * total];
        let own = self.own_nodata;
        for (dst, src) in out.chunks_exact_mut(total).zip(b.data.chunks_exact(first)) {
            for (d, &v) in dst.iter_mut().zip(src) {
                *d = if is_value(own, v) { f32::NAN } else { v };
            }
        }
        let mut at = first;
        for (r, cache) in self.extra.iter_mut() {
            let nb = r.info.bands;
            for y in b.y0..b.y0 + b.rows {
                if !cache
                    .as_ref()
                    .is_some_and(|c| (c.y0..c.y0 + c.rows).contains(&y))
                {
                    *cache = Some(r.read_block((y / r.block_rows()) as usize)?);
                }
                let c = cache.as_ref().expect("read above");
                let line = &c.data[(y - c.y0) as usize * w * nb..][..w * nb];
                let row = &mut out[(y - b.y0) as usize * w * total..][..w * total];
                for (dst, src) in row.chunks_exact_mut(total).zip(line.chunks_exact(nb)) {
                    for (d, &v) in dst[at..at + nb].iter_mut().zip(src) {
                        *d = if r.info.is_nodata(v) { f32::NAN } else { v };
                    }
                }
            }
            at += nb;
        }
        Ok(Block {
            y0: b.y0,
            rows: b.rows,
            data: out,
        })
    }
}

/// True when `v` is the no-data value `nodata` (NaN matches NaN).
fn is_value(nodata: Option<f64>, v: f32) -> bool {
    match nodata {
        Some(n) if n.is_nan() => v.is_nan(),
        Some(n) => v as f64 == n,
        None => false,
    }
}

/// Whether `path` names a band stack (a text file `*.stack`, see [`open_stack`]).
fn is_stack(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("stack"))
}

/// Largest band-stack list read.
const MAX_STACK_BYTES: u64 = 1 << 20;

/// Opens a band stack: a text file listing rasters on one grid, one path per line
/// (relative to the list's folder; blank lines and lines starting with `#` skipped), whose
/// bands are read as one scene in the listed order. Sensors often ship one file per band;
/// the files must share the grid and sample type. A band without a description takes its
/// file's name (without extension) when the file has one band.
fn open_stack(path: &Path, limits: &Limits) -> Result<GeoRaster> {
    let (file, _) = crate::raster::open_file(path)?;
    let mut text = String::new();
    file.take(MAX_STACK_BYTES + 1)
        .read_to_string(&mut text)
        .map_err(|e| {
            decode(
                path,
                format!("a band stack must be a UTF-8 text list of rasters ({e})"),
            )
        })?;
    if text.len() as u64 > MAX_STACK_BYTES {
        return Err(decode(
            path,
            format!("a band stack list is at most {MAX_STACK_BYTES} bytes"),
        ));
    }
    let dir = path.parent().unwrap_or(Path::new(""));
    let files: Vec<PathBuf> = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with('#'))
        .map(|l| dir.join(l))
        .collect();
    let Some(first) = files.first() else {
        return Err(decode(path, "the band stack lists no raster"));
    };
    let open_one = |f: &Path| -> Result<GeoRaster> {
        if is_stack(f) {
            return Err(decode(
                path,
                format!("{} is a band stack itself; list rasters", f.display()),
            ));
        }
        let mut r = GeoRaster::open(f, limits)?;
        if r.info.bands == 1 && r.info.descriptions.first().is_none_or(|d| d.is_none()) {
            let stem = f.file_stem().map(|s| s.to_string_lossy().into_owned());
            r.info.descriptions = vec![stem];
        }
        Ok(r)
    };
    let mut stack = open_one(first)?;
    stack.own_nodata = stack.info.nodata;
    let mut any_nodata = stack.info.nodata.is_some();
    for f in &files[1..] {
        let r = open_one(f)?;
        stack.same_grid(&r, "this band file")?;
        if r.info.sample != stack.info.sample {
            return Err(decode(
                f,
                format!(
                    "its samples are {:?}, those of {} {:?}: the files of a band stack share one sample type",
                    r.info.sample,
                    first.display(),
                    stack.info.sample
                ),
            ));
        }
        let bands = stack.info.bands + r.info.bands;
        if bands > MAX_BANDS {
            return Err(decode(
                path,
                format!("the stack has more than {MAX_BANDS} bands"),
            ));
        }
        let need = (stack.block_rows() as u64)
            .saturating_mul(stack.info.width as u64)
            .saturating_mul(bands as u64 * 4);
        if need > limits.max_alloc {
            return Err(over_limit(
                path,
                format!("a block of {bands} bands as f32 needs {need} bytes, over the limit of {} bytes", limits.max_alloc),
            ));
        }
        any_nodata |= r.info.nodata.is_some();
        stack.info.bands = bands;
        stack
            .info
            .scale_offset
            .extend_from_slice(&r.info.scale_offset);
        stack
            .info
            .descriptions
            .extend(r.info.descriptions.iter().cloned());
        stack.info.sparse_chunks += r.info.sparse_chunks;
        stack.extra.push((r, None));
    }
    if any_nodata {
        stack.info.nodata = Some(f64::NAN);
    }
    stack.path = path.to_path_buf();
    Ok(stack)
}
