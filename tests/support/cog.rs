//! Reading back the structure of a tiled GeoTIFF with the `tiff` crate's decoder (an
//! independent TIFF reader), and the Cloud-Optimized GeoTIFF layout rules checked on it.
//! Layout: the COG description at github.com/cogeotiff/cog-spec (spec.md) and OGC 21-026:
//! directories of full resolution then overviews at the start, tile data of the smallest
//! overview first and of the full resolution last.
#![allow(dead_code)]

use std::path::Path;
use tiff::decoder::{Decoder, DecodingResult};
use tiff::tags::Tag;

/// One directory (image) of the file.
#[derive(Debug, Clone)]
pub struct Image {
    pub ifd_at: u64,
    pub width: u32,
    pub height: u32,
    pub subfile: u32,
    pub tile: Option<(u32, u32)>,
    pub compression: u16,
    pub predictor: u16,
    pub photometric: u16,
    pub sample_format: u16,
    pub colour_map: Option<Vec<u16>>,
    pub nodata: Option<String>,
    pub offsets: Vec<u64>,
    pub counts: Vec<u64>,
    /// The decoded pixels (u8 or f32 as f64).
    pub pixels: Vec<f64>,
}

/// Whether the file is BigTIFF (version 43 in the header, TIFF 6.0 / BigTIFF).
pub fn is_bigtiff(path: &Path) -> bool {
    let b = std::fs::read(path).unwrap();
    let v = if &b[..2] == b"II" {
        u16::from_le_bytes([b[2], b[3]])
    } else {
        u16::from_be_bytes([b[2], b[3]])
    };
    v == 43
}

/// The file's bytes with PhotometricInterpretation palette (3) turned into BlackIsZero (1)
/// in every directory, so the `tiff` crate (which does not decode palette images) reads the
/// class numbers. Little-endian files only (what the writer makes).
fn as_grey(path: &Path) -> Vec<u8> {
    let mut b = std::fs::read(path).unwrap();
    assert_eq!(&b[..2], b"II");
    let big = u16::from_le_bytes([b[2], b[3]]) == 43;
    let word = |b: &[u8], at: usize, n: usize| -> u64 {
        let mut v = [0u8; 8];
        v[..n].copy_from_slice(&b[at..at + n]);
        u64::from_le_bytes(v)
    };
    let (first, count_len, entry_len, ptr_len, value_at) = if big {
        (word(&b, 8, 8), 8, 20, 8, 12)
    } else {
        (word(&b, 4, 4), 2, 12, 4, 8)
    };
    let mut ifd = first as usize;
    while ifd != 0 {
        let n = word(&b, ifd, count_len) as usize;
        for e in 0..n {
            let at = ifd + count_len + e * entry_len;
            if word(&b, at, 2) == 262 && word(&b, at + value_at, 2) == 3 {
                b[at + value_at] = 1;
            }
        }
        ifd = word(&b, ifd + count_len + n * entry_len, ptr_len) as usize;
    }
    b
}

/// Every directory of the file in order, with its tags and pixels.
pub fn images(path: &Path) -> Vec<Image> {
    let mut d = Decoder::new(std::fs::File::open(path).unwrap()).unwrap();
    let mut grey = Decoder::new(std::io::Cursor::new(as_grey(path))).unwrap();
    let mut out = Vec::new();
    loop {
        let (width, height) = d.dimensions().unwrap();
        let u16tag = |d: &mut Decoder<std::fs::File>, t: Tag, default: u16| {
            d.find_tag_unsigned::<u16>(t).unwrap().unwrap_or(default)
        };
        let tile_w = d.find_tag_unsigned::<u32>(Tag::TileWidth).unwrap();
        let tile = tile_w.map(|tw| (tw, d.get_tag_unsigned::<u32>(Tag::TileLength).unwrap()));
        let (off_tag, count_tag) = if tile.is_some() {
            (Tag::TileOffsets, Tag::TileByteCounts)
        } else {
            (Tag::StripOffsets, Tag::StripByteCounts)
        };
        let image = Image {
            ifd_at: d.ifd_pointer().unwrap().0,
            width,
            height,
            subfile: d
                .find_tag_unsigned::<u32>(Tag::NewSubfileType)
                .unwrap()
                .unwrap_or(0),
            tile,
            compression: u16tag(&mut d, Tag::Compression, 1),
            predictor: u16tag(&mut d, Tag::Predictor, 1),
            photometric: u16tag(&mut d, Tag::PhotometricInterpretation, 1),
            sample_format: u16tag(&mut d, Tag::SampleFormat, 1),
            colour_map: d.find_tag_unsigned_vec::<u16>(Tag::ColorMap).unwrap(),
            nodata: d
                .find_tag(Tag::GdalNodata)
                .unwrap()
                .map(|v| v.into_string().unwrap()),
            offsets: d.find_tag_unsigned_vec::<u64>(off_tag).unwrap().unwrap(),
            counts: d.find_tag_unsigned_vec::<u64>(count_tag).unwrap().unwrap(),
            pixels: match grey.read_image().unwrap() {
                DecodingResult::U8(v) => v.into_iter().map(f64::from).collect(),
                DecodingResult::F32(v) => v.into_iter().map(f64::from).collect(),
                other => panic!("unexpected sample type {other:?}"),
            },
        };
        out.push(image);
        if !d.more_images() {
            break;
        }
        d.next_image().unwrap();
        grey.next_image().unwrap();
    }
    out
}

/// Checks the tiled, overview and Cloud-Optimized layout of `images` for a `width × height`
/// raster with `tile`-pixel tiles: full resolution first (NewSubfileType 0), then overviews
/// (NewSubfileType 1) each half the size of the one before (rounded up) down to the first
/// that fits in one tile; the first directory right after the header (byte 8, or 16 for
/// BigTIFF), directories in increasing order and all before the first tile; tiles of the
/// smallest level first and of the full resolution last, row-major within a level.
pub fn check_cog_layout(images: &[Image], width: u32, height: u32, tile: u32, big: bool) {
    let (mut w, mut h) = (width, height);
    for (i, im) in images.iter().enumerate() {
        assert_eq!((im.width, im.height), (w, h), "level {i} size");
        assert_eq!(im.subfile, (i > 0) as u32, "level {i} NewSubfileType");
        assert_eq!(im.tile, Some((tile, tile)), "level {i} tile size");
        let tiles = w.div_ceil(tile) as usize * h.div_ceil(tile) as usize;
        assert_eq!(im.offsets.len(), tiles, "level {i} tile count");
        assert!(
            im.offsets.windows(2).all(|p| p[0] < p[1]),
            "level {i}: tiles in row-major order"
        );
        if i + 1 < images.len() {
            assert!(
                w > tile || h > tile,
                "level {i} fits in a tile: no overview after it"
            );
        } else {
            assert!(w <= tile && h <= tile, "the last level fits in one tile");
        }
        (w, h) = (w.div_ceil(2), h.div_ceil(2));
    }
    assert_eq!(images[0].ifd_at, if big { 16 } else { 8 });
    assert!(images.windows(2).all(|p| p[0].ifd_at < p[1].ifd_at));
    let first_data = images
        .iter()
        .flat_map(|im| im.offsets.iter())
        .min()
        .unwrap();
    assert!(images.iter().all(|im| im.ifd_at < *first_data));
    // Smallest level first: each level's data ends before the next larger level's begins.
    for p in images.windows(2) {
        let (larger, smaller) = (&p[0], &p[1]);
        let smaller_end = smaller.offsets.last().unwrap() + smaller.counts.last().unwrap();
        assert!(
            smaller_end <= larger.offsets[0],
            "smaller levels come first"
        );
    }
    assert_eq!(images.last().unwrap().offsets[0], *first_data);
}

/// The 2 × 2 reduction of a level: for classes (nodata 0) the most frequent non-zero class
/// of the block, the first in reading order on a tie, 0 only when the block is all 0; for
/// values the mean of those other than `nodata`. Written here from the definition in
/// README.md ("Land-cover rasters").
pub fn reduce(v: &[f64], w: usize, h: usize, classes: bool, nodata: f64) -> Vec<f64> {
    let (ow, oh) = (w.div_ceil(2), h.div_ceil(2));
    let mut out = Vec::with_capacity(ow * oh);
    for y in 0..oh {
        for x in 0..ow {
            let mut block = Vec::new();
            for yy in 2 * y..(2 * y + 2).min(h) {
                for xx in 2 * x..(2 * x + 2).min(w) {
                    block.push(v[yy * w + xx]);
                }
            }
            let valid: Vec<f64> = block.iter().copied().filter(|&b| b != nodata).collect();
            out.push(if valid.is_empty() {
                nodata
            } else if classes {
                let mut best = (valid[0], 0);
                for &c in &valid {
                    let n = valid.iter().filter(|&&d| d == c).count();
                    if n > best.1 {
                        best = (c, n);
                    }
                }
                best.0
            } else {
                valid.iter().sum::<f64>() / valid.len() as f64
            });
        }
    }
    out
}
