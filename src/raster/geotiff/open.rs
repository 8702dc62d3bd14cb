//! Opening a raster: TIFF/GeoTIFF header checks (bands, sample type, strip or tile layout,
//! sizes against the limits and the file), or another image format decoded whole.

use super::blocks::{image_block, read_tiff_block, TiffSource};
use super::crs::GridCrs;
use super::decoder::{
    check_tag_fits, decode, file_len, guarded, is_tiff_magic, over_limit, read_up_to, tiff_decoder,
    tiff_error, unsupported,
};
use super::mask::{ifd_chain, one_bytes, MaskSource};
use super::metadata::read_gdal_metadata;
use super::tags::{read_geo, read_nodata, GeoTags};
use super::types::{Block, RasterInfo, SampleKind};
use crate::error::{Error, Result};
use crate::limits::Limits;
use std::io::{Read, Seek};
use std::path::{Path, PathBuf};
use tiff::decoder::{ChunkType, Decoder};
use tiff::tags::Tag;
use tiff::ColorType;

/// Largest number of bands accepted from a TIFF.
pub const MAX_BANDS: usize = 256;

/// An open raster, read one block at a time.
pub struct GeoRaster {
    pub(super) path: PathBuf,
    pub(super) info: RasterInfo,
    source: Source,
    /// A raster on the same grid whose non-zero pixels are left out, and its last block read.
    exclusion: Option<Box<(GeoRaster, Option<Block>)>>,
    /// A band stack: the rasters whose bands follow this one's, each with its last block.
    pub(super) extra: Vec<(GeoRaster, Option<Block>)>,
    /// In a band stack, the first file's own no-data value.
    pub(super) own_nodata: Option<f64>,
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

impl GeoRaster {
    /// Opens a TIFF/GeoTIFF (1–256 bands; u8/u16/i16/u32/i32/f32/f64; chunky or planar; strips or
    /// tiles; uncompressed, LZW, Deflate, PackBits — whatever the `tiff` crate decodes). Other
    /// formats (PNG, JPEG, …) open through the `image` crate as RGB (3 bands, u8 or u16) with
    /// empty GeoTags and one block.
    ///
    /// Checks width × height against `limits.max_pixels`, and the largest buffer needed (one
    /// block as `f32`, one decoded strip or tile) against `limits.max_alloc`, before reading any
    /// pixel data: a header claiming 100000 × 100000 pixels is refused at once.
    pub(super) fn open_single(path: &Path, limits: &Limits) -> Result<GeoRaster> {
        let (mut file, _) = crate::raster::open_file(path)?;
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
        let mut block = match &mut self.source {
            Source::Image(d) => image_block(d),
            Source::Tiff(t) => read_tiff_block(&self.path, &self.info, t, i as u32)?,
        };
        if !self.extra.is_empty() {
            block = self.stack_bands(block)?;
        }
        if let Some(ex) = self.exclusion.as_mut() {
            let (mask, cache) = &mut **ex;
            let (w, bands) = (self.info.width as usize, self.info.bands);
            let mask_bands = mask.info.bands;
            for y in block.y0..block.y0 + block.rows {
                if !cache
                    .as_ref()
                    .is_some_and(|c| (c.y0..c.y0 + c.rows).contains(&y))
                {
                    let b = mask.read_block((y / mask.block_rows()) as usize)?;
                    *cache = Some(b);
                }
                let c = cache.as_ref().expect("read above");
                let line = &c.data[(y - c.y0) as usize * w * mask_bands..];
                let out = &mut block.data[(y - block.y0) as usize * w * bands..];
                for x in 0..w {
                    // Left out where the first band is non-zero, NaN or the mask's nodata.
                    let m = line[x * mask_bands];
                    if m != 0.0 || mask.info.is_nodata(m) {
                        out[x * bands..(x + 1) * bands].fill(f32::NAN);
                    }
                }
            }
        }
        Ok(block)
    }

    /// Leaves out (reads as no data) every pixel where the first band of the raster at `path`
    /// is non-zero, not a number, or that raster's no-data value (for example a cloud mask
    /// with 1 = cloud). The raster must be on the same grid: same size, and the same
    /// georeferencing (pixel-to-map transform and CRS) when either has one; otherwise it is
    /// refused with the difference named.
    pub fn exclude_where(&mut self, path: &Path, limits: &Limits) -> Result<()> {
        let mask = GeoRaster::open(path, limits)?;
        self.same_grid(&mask, "this mask")?;
        self.info.excluded_by = Some(path.to_path_buf());
        self.exclusion = Some(Box::new((mask, None)));
        Ok(())
    }

    /// Refuses `other` (named `what` in the message) unless it is on this raster's grid:
    /// same size, and the same georeferencing (pixel-to-map transform and CRS) when either
    /// has one.
    pub(super) fn same_grid(&self, other: &GeoRaster, what: &str) -> Result<()> {
        let (a, b) = (&self.info, &other.info);
        let refuse = |why: String| {
            Err(decode(
                &other.path,
                format!(
                    "{what} is not on the grid of {}: {why}",
                    self.path.display()
                ),
            ))
        };
        if (a.width, a.height) != (b.width, b.height) {
            return refuse(format!(
                "it is {} x {} pixels, the scene {} x {}",
                b.width, b.height, a.width, a.height
            ));
        }
        let (ga, gb) = (GridCrs::from_tags(&a.geo), GridCrs::from_tags(&b.geo));
        match (ga.transform, gb.transform) {
            (Some(ta), Some(tb)) => {
                let size = ta.pixel_model_area().sqrt();
                if ta
                    .0
                    .iter()
                    .zip(tb.0)
                    .any(|(x, y)| (x - y).abs() > 1e-6 * size)
                {
                    return refuse(format!(
                        "its pixel-to-map transform is {:?}, the scene's {:?}",
                        tb.0, ta.0
                    ));
                }
            }
            (None, None) => {}
            (Some(_), None) => return refuse("it has no georeferencing".into()),
            (None, Some(_)) => return refuse("the scene has no georeferencing".into()),
        }
        if ga.crs.describe() != gb.crs.describe() {
            return refuse(format!(
                "its CRS is {}, the scene's {}",
                gb.crs.describe(),
                ga.crs.describe()
            ));
        }
        Ok(())
    }
}

/// Where the PhotometricInterpretation value of the first directory is stored, when it is
/// one inline SHORT: the file offset and the bytes of the value 1 (BlackIsZero) in the file's
/// byte order.
fn photometric_patch(path: &Path) -> Option<(u64, [u8; 2])> {
    let at = ifd_chain(path)?.first()?.photometric?.0;
    Some((at, one_bytes(path)?))
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
        // RGB with extra bands (and not JPEG, whose decoder depends on the colour space), or
        // a palette image, read as its index values (a class raster with a colour table).
        if matches!(photometric, Some(2 | 3)) && !matches!(compression, Some(6 | 7)) {
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
    let extra: Vec<u16> = decoder
        .find_tag_unsigned_vec::<u16>(Tag::ExtraSamples)
        .map_err(|e| tiff_error(path, e))?
        .unwrap_or_default();
    // ExtraSamples describes the last samples; 1 = associated, 2 = unassociated alpha.
    let alpha = extra
        .iter()
        .position(|&v| v == 1 || v == 2)
        .filter(|_| extra.len() <= bands)
        .map(|k| bands - extra.len() + k);
    if alpha.is_some() && bands == 1 {
        return Err(unsupported(
            path,
            "the only band is alpha; there is nothing to classify",
        ));
    }
    let offsets_tag = if tiled {
        Tag::TileOffsets
    } else {
        Tag::StripOffsets
    };
    let counts_tag = if tiled {
        Tag::TileByteCounts
    } else {
        Tag::StripByteCounts
    };
    let offsets = decoder
        .get_tag_u64_vec(offsets_tag)
        .map_err(|e| tiff_error(path, e))?;
    let counts = decoder
        .get_tag_u64_vec(counts_tag)
        .map_err(|e| tiff_error(path, e))?;
    let chunks: Vec<(u64, u64)> = offsets.into_iter().zip(counts).collect();
    let sparse_chunks = chunks.iter().filter(|c| c.0 == 0 || c.1 == 0).count();
    let mut meta = read_gdal_metadata(&mut decoder, path, bands)?;
    if let Some(a) = alpha {
        meta.scale_offset.remove(a);
        meta.descriptions.remove(a);
    }
    let mask = MaskSource::find(path, width, height, limits)?;
    let mask_origin = mask.as_ref().map(|m| m.origin.clone());
    Ok(GeoRaster {
        path: path.into(),
        info: RasterInfo {
            width,
            height,
            bands: bands - alpha.is_some() as usize,
            sample,
            planar,
            tiled,
            geo,
            nodata,
            alpha_band: alpha.map(|a| a + 1),
            mask: mask_origin,
            sparse_chunks,
            excluded_by: None,
            scale_offset: meta.scale_offset,
            descriptions: meta.descriptions,
        },
        source: Source::Tiff(Box::new(TiffSource {
            decoder,
            chunk_w,
            chunk_h,
            across,
            down,
            poisoned: false,
            chunks,
            stored_bands: bands,
            alpha,
            mask: mask.map(Box::new),
        })),
        exclusion: None,
        extra: Vec::new(),
        own_nodata: None,
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
            // The decoded image's alpha, when the file has one (band 4 of RGBA).
            alpha_band: d.has_alpha.then_some(4),
            mask: None,
            sparse_chunks: 0,
            excluded_by: None,
            scale_offset: vec![(1.0, 0.0); 3],
            descriptions: vec![None; 3],
        },
        source: Source::Image(d),
        exclusion: None,
        extra: Vec::new(),
        own_nodata: None,
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
