//! Single-band GeoTIFFs written as tiles with overviews, laid out as a Cloud-Optimized
//! GeoTIFF, while rows stream in.
//!
//! Rows arrive top to bottom. Each level (the full resolution, then overviews halving the
//! size until one fits in a tile) gathers a band of 256 rows, cuts it into 256 × 256 tiles,
//! compresses them (in parallel, each tile on its own, so the bytes never depend on the
//! thread count) and appends them to its own scratch store; every second row of a level
//! makes, with the row before it, one row of the next level. Memory stays at one band per
//! level. At the end the file is assembled: header, every directory (full resolution first,
//! then the overviews from largest to smallest, each followed by its tag values), then the
//! tile data, smallest overview first and full resolution last, row-major within a level.

use super::ifd::{self, Entry};
use super::tags::{geo_tag_name, parse_nodata, GeoTagValue, GeoTags};
use super::tiles::{pack_tile, reduce_rows, tile_bound, TileSample, TILE};
use super::write_common::{check_strip, WriteOptions, OUTPUT_NAME};
use crate::error::{Error, Result};
use rayon::prelude::*;
use std::io::{Read, Seek, SeekFrom, Write};

/// Where one level's compressed tiles wait until the file is assembled: a temporary file
/// next to the output, or memory.
pub trait Scratch: Read + Write + Seek + Send {}
impl<T: Read + Write + Seek + Send> Scratch for T {}

/// Hands out a new scratch store, once per level.
pub type ScratchSource<'a> = dyn FnMut() -> Result<Box<dyn Scratch>> + 'a;

/// A scratch source keeping every level in memory (for rasters already held whole).
pub fn memory_scratch() -> Result<Box<dyn Scratch>> {
    Ok(Box::new(std::io::Cursor::new(Vec::new())))
}

/// Width and height of every level: the full resolution, then halves (rounded up) until
/// both sides fit in one tile.
pub fn cog_levels(width: u32, height: u32) -> Vec<(u32, u32)> {
    let mut v = vec![(width, height)];
    let (mut w, mut h) = (width, height);
    while w > TILE || h > TILE {
        (w, h) = (w.div_ceil(2), h.div_ceil(2));
        v.push((w, h));
    }
    v
}

/// The most bytes the tiled file of a `width × height` band of `sample_bytes` samples can
/// take: every tile of every level at its worst compressed size, plus the directories
/// (the colour table, GeoTIFF tags and offsets with room to spare). Known before any row is
/// written, so the choice of BigTIFF is made before the run.
pub fn cog_size_bound(width: u32, height: u32, sample_bytes: u32) -> u64 {
    cog_levels(width, height)
        .iter()
        .map(|&(w, h)| {
            let tiles = w.div_ceil(TILE) as u64 * h.div_ceil(TILE) as u64;
            tiles * (tile_bound(sample_bytes as usize) + 16) + 64 * 1024
        })
        .sum()
}

/// The picture of one band being written.
pub struct CogBand<'a> {
    pub width: u32,
    pub height: u32,
    pub geo: &'a GeoTags,
    /// GDAL_NODATA as text (must parse as a number); also pads the edge tiles and is left
    /// out of the overviews' reduction.
    pub nodata: Option<&'a str>,
    /// BigTIFF and the colour table (compression is always DEFLATE with a predictor).
    pub opts: &'a WriteOptions,
    /// The band's description, written as GDAL writes one (GDAL_METADATA, an item
    /// `DESCRIPTION` of sample 0), so a GIS names the layer.
    pub description: Option<&'a str>,
}

/// One level being written.
struct Level<T> {
    width: u32,
    height: u32,
    /// The rows of the current band, row-major.
    band: Vec<T>,
    /// Rows received so far.
    rows: u32,
    /// The even row waiting for its partner, for the next level.
    pending: Option<Vec<T>>,
    store: Box<dyn Scratch>,
    /// Offset in `store` and byte count of every tile, row-major.
    tiles: Vec<(u64, u64)>,
    stored: u64,
}

struct Writer<T> {
    levels: Vec<Level<T>>,
    nodata: Option<T>,
    pad: T,
}

impl<T: TileSample> Writer<T> {
    /// Adds row `row` to level `i`, cuts a band into tiles when it is full or the level
    /// ends, and passes reduced rows down.
    fn push(&mut self, i: usize, row: &[T]) -> Result<()> {
        let (nodata, pad, count) = (self.nodata, self.pad, self.levels.len());
        let level = &mut self.levels[i];
        let y = level.rows;
        level.band.extend_from_slice(row);
        level.rows += 1;
        if level.rows % TILE == 0 || level.rows == level.height {
            level.flush(pad)?;
        }
        let last = y + 1 == level.height;
        if i + 1 == count {
            return Ok(());
        }
        let reduced = if y % 2 == 0 {
            if !last {
                level.pending = Some(row.to_vec());
                return Ok(());
            }
            reduce_rows(row, None, nodata)
        } else {
            let a = level.pending.take().expect("an even row waits");
            reduce_rows(&a, Some(row), nodata)
        };
        self.push(i + 1, &reduced)
    }
}

impl<T: TileSample> Level<T> {
    fn flush(&mut self, pad: T) -> Result<()> {
        let rows = (self.band.len() / self.width as usize) as u32;
        let across = self.width.div_ceil(TILE);
        let (band, width) = (&self.band, self.width);
        let packed: Vec<Vec<u8>> = (0..across)
            .into_par_iter()
            .map(|tx| pack_tile(band, width, rows, tx, pad))
            .collect();
        for p in packed {
            self.store
                .write_all(&p)
                .map_err(|e| Error::io(OUTPUT_NAME, e))?;
            self.tiles.push((self.stored, p.len() as u64));
            self.stored += p.len() as u64;
        }
        self.band.clear();
        Ok(())
    }
}

/// Checks the band's description before anything is written.
fn check_band(band: &CogBand) -> Result<()> {
    if band.width == 0 || band.height == 0 {
        return Err(Error::output(
            OUTPUT_NAME,
            format!(
                "cannot write an empty raster ({} x {})",
                band.width, band.height
            ),
        ));
    }
    let ascii = |what: &str, s: &str| {
        if !s.is_ascii() || s.bytes().any(|b| b == 0) {
            return Err(Error::output(
                OUTPUT_NAME,
                format!("{what} must be ASCII text without NUL characters"),
            ));
        }
        Ok(())
    };
    if let Some(text) = band.nodata {
        ascii("the nodata value", text)?;
        if parse_nodata(text).is_none() {
            return Err(Error::output(
                OUTPUT_NAME,
                format!("the nodata value {text:?} is not a number"),
            ));
        }
    }
    for (code, value) in band.geo.entries() {
        if let GeoTagValue::Ascii(s) = value {
            ascii(geo_tag_name(code), s)?;
        }
    }
    Ok(())
}

/// Writes one band as a Cloud-Optimized GeoTIFF into `out` (written front to back, never
/// sought). `next_rows(y0, rows)` is called top to bottom for strips of about 256 KiB and
/// must return exactly `rows × width` values; `scratch` is asked for one store per level.
pub(super) fn write_cog<T: TileSample, W: Write>(
    out: W,
    band: &CogBand,
    nodata: Option<T>,
    scratch: &mut ScratchSource,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<T>>,
) -> Result<()> {
    check_band(band)?;
    if band.opts.colour_map.is_some() && T::BYTES != 1 {
        return Err(Error::output(
            OUTPUT_NAME,
            "a colour table needs an 8-bit band",
        ));
    }
    let mut levels = Vec::new();
    for (w, h) in cog_levels(band.width, band.height) {
        levels.push(Level {
            width: w,
            height: h,
            band: Vec::with_capacity(w as usize * TILE.min(h) as usize),
            rows: 0,
            pending: None,
            store: scratch()?,
            tiles: Vec::new(),
            stored: 0,
        });
    }
    let mut writer = Writer {
        levels,
        nodata,
        pad: nodata.unwrap_or(T::PAD),
    };
    let (width, height) = (band.width, band.height);
    let rps = super::write::rows_per_strip(width as u64 * T::BYTES as u64, height);
    let mut y0 = 0u32;
    while y0 < height {
        let rows = rps.min(height - y0);
        let values = next_rows(y0, rows)?;
        check_strip(y0, rows, width, values.len())?;
        for row in values.chunks_exact(width as usize) {
            writer.push(0, row)?;
        }
        y0 += rows;
    }
    assemble::<T, W>(out, band, writer.levels)
}

/// The directory of one level, with the tiles' final offsets.
fn entries<T: TileSample>(
    band: &CogBand,
    level: usize,
    w: u32,
    h: u32,
    offsets: &[u64],
    counts: &[u64],
) -> Vec<Entry> {
    let big = band.opts.big;
    let mut e = vec![
        Entry::long(254, (level > 0) as u32), // NewSubfileType: 1 = reduced resolution
        Entry::long(256, w),
        Entry::long(257, h),
        Entry::short(258, (T::BYTES * 8) as u16),
        Entry::short(259, 8), // Deflate, as GDAL writes it
        Entry::short(262, if band.opts.colour_map.is_some() { 3 } else { 1 }),
        Entry::short(277, 1),
        Entry::short(284, 1),
        Entry::short(317, T::PREDICTOR),
        Entry::short(322, TILE as u16),
        Entry::short(323, TILE as u16),
        Entry::offsets(324, offsets, big),
        Entry::offsets(325, counts, big),
        Entry::short(339, T::FORMAT),
    ];
    if let Some(colours) = &band.opts.colour_map {
        e.push(Entry::shorts(
            320,
            &super::write_common::colour_map(colours),
        ));
    }
    if level == 0 {
        e.extend(ifd::geo_entries(band.geo, band.nodata));
        if let Some(d) = band.description {
            e.push(Entry::ascii(
                super::TAG_GDAL_METADATA,
                &super::metadata::description_text(d),
            ));
        }
    } else if let Some(text) = band.nodata {
        e.push(Entry::ascii(super::tags::TAG_GDAL_NODATA, text));
    }
    e
}

/// Header, directories, then the stores copied smallest level first.
fn assemble<T: TileSample, W: Write>(
    mut out: W,
    band: &CogBand,
    mut levels: Vec<Level<T>>,
) -> Result<()> {
    let big = band.opts.big;
    let zeros = |n: usize| vec![0u64; n];
    // Directory sizes do not depend on the offsets' values: measure with zeros.
    let mut ifd_at = vec![ifd::header_len(big)];
    for (i, l) in levels.iter().enumerate() {
        let n = l.tiles.len();
        let len = ifd::ifd_len(
            &entries::<T>(band, i, l.width, l.height, &zeros(n), &zeros(n)),
            big,
        );
        ifd_at.push(ifd_at[i] + len);
    }
    let mut data_at = vec![0u64; levels.len()];
    let mut at = ifd_at[levels.len()];
    for i in (0..levels.len()).rev() {
        data_at[i] = at;
        at += levels[i].stored;
    }
    if !big && at > u32::MAX as u64 {
        return Err(Error::output(
            OUTPUT_NAME,
            format!("the tiled raster came to {at} bytes, past what classic TIFF can address; BigTIFF was needed"),
        ));
    }
    let io = |e: std::io::Error| Error::io(OUTPUT_NAME, e);
    out.write_all(&ifd::header(big, ifd_at[0])).map_err(io)?;
    for (i, l) in levels.iter().enumerate() {
        let offsets: Vec<u64> = l.tiles.iter().map(|t| data_at[i] + t.0).collect();
        let counts: Vec<u64> = l.tiles.iter().map(|t| t.1).collect();
        let next = if i + 1 < levels.len() {
            ifd_at[i + 1]
        } else {
            0
        };
        let e = entries::<T>(band, i, l.width, l.height, &offsets, &counts);
        let bytes = ifd::ifd_bytes(&e, ifd_at[i], next, big);
        if bytes.len() as u64 != ifd_at[i + 1] - ifd_at[i] {
            // Would shift every offset after it: never write such a file.
            return Err(Error::output(
                OUTPUT_NAME,
                "a directory changed size while being laid out",
            ));
        }
        out.write_all(&bytes).map_err(io)?;
    }
    for l in levels.iter_mut().rev() {
        l.store.seek(SeekFrom::Start(0)).map_err(io)?;
        let copied = std::io::copy(&mut (&mut l.store).take(l.stored), &mut out).map_err(io)?;
        if copied != l.stored {
            return Err(Error::output(
                OUTPUT_NAME,
                "a scratch file came back shorter than written",
            ));
        }
    }
    out.flush().map_err(io)?;
    Ok(())
}

/// Writes a single-band 8-bit GeoTIFF as a Cloud-Optimized GeoTIFF (see [`write_cog`]):
/// horizontal predictor, overviews by the most frequent class of each 2 × 2 block.
pub fn write_u8_cog<W: Write>(
    out: W,
    band: &CogBand,
    scratch: &mut ScratchSource,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<u8>>,
) -> Result<()> {
    let nodata = band
        .nodata
        .and_then(parse_nodata)
        .filter(|v| v.fract() == 0.0 && (0.0..=255.0).contains(v))
        .map(|v| v as u8);
    write_cog::<u8, W>(out, band, nodata, scratch, next_rows)
}

/// Writes a single-band 32-bit float GeoTIFF as a Cloud-Optimized GeoTIFF: floating-point
/// predictor, overviews by the mean of each 2 × 2 block's values other than nodata.
pub fn write_f32_cog<W: Write>(
    out: W,
    band: &CogBand,
    scratch: &mut ScratchSource,
    next_rows: &mut dyn FnMut(u32, u32) -> Result<Vec<f32>>,
) -> Result<()> {
    let nodata = band.nodata.and_then(parse_nodata).map(|v| v as f32);
    write_cog::<f32, W>(out, band, nodata, scratch, next_rows)
}
