//! What the tiled writer does to samples: the tile size, one tile cut from a band of rows
//! (padded with nodata past the edges), the predictor, DEFLATE, and the 2 × 2 reduction that
//! makes each overview row from two rows of the level above.

/// Tile width and height, in pixels (TIFF 6.0 §15: a multiple of 16).
pub const TILE: u32 = 256;

/// A sample type the tiled writer handles.
pub(super) trait TileSample: Copy + Send + Sync + PartialEq + 'static {
    /// BitsPerSample / 8.
    const BYTES: usize;
    /// SampleFormat (TIFF 6.0 §19): 1 unsigned integer, 3 IEEE float.
    const FORMAT: u16;
    /// Predictor (TIFF 6.0 §14; Adobe Technical Note 3): 2 horizontal, 3 floating point.
    const PREDICTOR: u16;
    /// The value padding a tile past the image, when there is no nodata value.
    const PAD: Self;
    /// Appends the sample's bytes, most significant first for the floating-point predictor
    /// (which stores byte planes in that order whatever the file's byte order) and
    /// little-endian otherwise.
    fn put(self, out: &mut Vec<u8>);
    /// One overview pixel from the 1 to 4 pixels of a 2 × 2 block (top row first).
    fn reduce(block: &[Self], nodata: Option<Self>) -> Self;
}

impl TileSample for u8 {
    const BYTES: usize = 1;
    const FORMAT: u16 = 1;
    const PREDICTOR: u16 = 2;
    const PAD: u8 = 0;
    fn put(self, out: &mut Vec<u8>) {
        out.push(self);
    }
    /// Classes: the most frequent value of the block other than nodata (a class never
    /// grows from averaging two others), ties going to the first in reading order; nodata
    /// only where the whole block is nodata.
    fn reduce(block: &[u8], nodata: Option<u8>) -> u8 {
        let mut best: Option<(u8, usize)> = None;
        for &v in block {
            if Some(v) == nodata {
                continue;
            }
            let n = block.iter().filter(|&&w| w == v).count();
            if best.is_none_or(|(_, m)| n > m) {
                best = Some((v, n));
            }
        }
        best.map(|(v, _)| v).or(nodata).unwrap_or(block[0])
    }
}

impl TileSample for f32 {
    const BYTES: usize = 4;
    const FORMAT: u16 = 3;
    const PREDICTOR: u16 = 3;
    const PAD: f32 = f32::NAN;
    fn put(self, out: &mut Vec<u8>) {
        out.extend_from_slice(&self.to_be_bytes());
    }
    /// Values: the mean of the block's values other than nodata and NaN (in `f64`, so the
    /// result does not depend on anything but the four values); nodata (or NaN) where none.
    fn reduce(block: &[f32], nodata: Option<f32>) -> f32 {
        let (mut sum, mut n) = (0f64, 0u32);
        for &v in block {
            if !v.is_nan() && Some(v) != nodata {
                sum += v as f64;
                n += 1;
            }
        }
        if n == 0 {
            nodata.unwrap_or(f32::NAN)
        } else {
            (sum / n as f64) as f32
        }
    }
}

/// The tile at column `tx` of a band of `rows` rows of `width` samples, as TIFF stores it:
/// 256 × 256 samples (padded with `pad`), predictor applied row by row, DEFLATE-compressed
/// (zlib stream, RFC 1950; TIFF compression 8). When DEFLATE would grow the data, the tile
/// is stored in uncompressed DEFLATE blocks instead, so a tile never exceeds
/// [`tile_bound`] bytes.
pub(super) fn pack_tile<T: TileSample>(
    band: &[T],
    width: u32,
    rows: u32,
    tx: u32,
    pad: T,
) -> Vec<u8> {
    let t = TILE as usize;
    let x0 = (tx * TILE) as usize;
    let cols = (width as usize - x0).min(t);
    let mut raw: Vec<u8> = Vec::with_capacity(t * t * T::BYTES);
    let mut line: Vec<u8> = Vec::with_capacity(t * T::BYTES);
    for r in 0..t {
        line.clear();
        if r < rows as usize {
            let row = &band[r * width as usize + x0..][..cols];
            row.iter().for_each(|&v| v.put(&mut line));
        }
        while line.len() < t * T::BYTES {
            pad.put(&mut line);
        }
        predict::<T>(&mut line);
        raw.extend_from_slice(&line);
    }
    let packed = miniz_oxide::deflate::compress_to_vec_zlib(&raw, 6);
    if packed.len() as u64 > tile_bound(T::BYTES) {
        return miniz_oxide::deflate::compress_to_vec_zlib(&raw, 0);
    }
    packed
}

/// The most bytes one packed tile of `sample_bytes` samples can take: the raw tile, plus
/// the zlib header and checksum and 5 bytes for each stored block of at most 64 KiB
/// (RFC 1951 §3.2.4), with room to spare.
pub(super) fn tile_bound(sample_bytes: usize) -> u64 {
    let raw = (TILE as u64).pow(2) * sample_bytes as u64;
    raw + raw / 1024 + 64
}

/// The predictor on one tile row: horizontal differencing of bytes (TIFF 6.0 §14, 8-bit
/// samples), or for floats the byte planes (most significant bytes of every sample, then the
/// next, ...) differenced byte by byte along the row (Adobe Photoshop TIFF Technical Note 3).
/// `put` already wrote float samples most significant byte first.
fn predict<T: TileSample>(line: &mut [u8]) {
    if T::BYTES > 1 {
        let n = line.len() / T::BYTES;
        let mut planes = vec![0u8; line.len()];
        for (i, sample) in line.chunks_exact(T::BYTES).enumerate() {
            for (b, &byte) in sample.iter().enumerate() {
                planes[b * n + i] = byte;
            }
        }
        line.copy_from_slice(&planes);
    }
    for x in (1..line.len()).rev() {
        line[x] = line[x].wrapping_sub(line[x - 1]);
    }
}

/// One overview row from rows `a` and `b` (the last row of an odd height has no `b`) of
/// `width` samples: `ceil(width / 2)` samples, each reduced from its 2 × 2 block.
pub(super) fn reduce_rows<T: TileSample>(a: &[T], b: Option<&[T]>, nodata: Option<T>) -> Vec<T> {
    let width = a.len();
    let mut out = Vec::with_capacity(width.div_ceil(2));
    let mut block = [T::PAD; 4];
    for x in (0..width).step_by(2) {
        let x1 = (x + 2).min(width);
        let mut n = 0;
        for row in std::iter::once(a).chain(b) {
            for &v in &row[x..x1] {
                block[n] = v;
                n += 1;
            }
        }
        out.push(T::reduce(&block[..n], nodata));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn class_blocks_take_the_most_frequent_class_and_ignore_nodata() {
        assert_eq!(u8::reduce(&[3, 3, 2, 1], Some(0)), 3);
        assert_eq!(u8::reduce(&[0, 0, 0, 5], Some(0)), 5);
        assert_eq!(u8::reduce(&[0, 0, 0, 0], Some(0)), 0);
        // A tie goes to the first class in reading order (top left, top right, ...).
        assert_eq!(u8::reduce(&[2, 4, 4, 2], Some(0)), 2);
        assert_eq!(u8::reduce(&[0, 4, 2, 0], Some(0)), 4);
    }

    #[test]
    fn value_blocks_average_what_is_there() {
        assert_eq!(f32::reduce(&[0.25, 0.75, -1.0, -1.0], Some(-1.0)), 0.5);
        assert_eq!(f32::reduce(&[-1.0, -1.0], Some(-1.0)), -1.0);
        assert_eq!(f32::reduce(&[f32::NAN, 2.0], None), 2.0);
        assert!(f32::reduce(&[f32::NAN], None).is_nan());
    }

    #[test]
    fn odd_widths_and_heights_keep_their_last_column_and_row() {
        let a = [1u8, 4, 2, 2, 3];
        assert_eq!(reduce_rows(&a, None, Some(0)), vec![1, 2, 3]);
        let b = [4u8, 4, 4, 4, 0];
        assert_eq!(reduce_rows(&a, Some(&b), Some(0)), vec![4, 2, 3]);
    }

    #[test]
    fn the_float_predictor_orders_byte_planes_then_differences() {
        // Two samples 1.0 (3F 80 00 00) and 2.0 (40 00 00 00): planes 3F 40 | 80 00 | 00 00
        // | 00 00, then each byte minus the one before it (mod 256).
        let mut line = Vec::new();
        1.0f32.put(&mut line);
        2.0f32.put(&mut line);
        predict::<f32>(&mut line);
        assert_eq!(line, vec![0x3F, 0x01, 0x40, 0x80, 0x00, 0x00, 0x00, 0x00]);
    }
}
