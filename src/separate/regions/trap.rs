//! Trapping: each ink spreading a few pixels under its darker neighbours.
//!
//! Trapping is exact: for spreads up to 32 pixels it dilates bit-packed rows of each ink by a
//! digital disc (64 pixels per word operation); beyond that it uses the Euclidean distance
//! transform of Felzenszwalb & Huttenlocher 2012 (a capped column scan, then the lower envelope
//! of parabolas along each row, in exact integer arithmetic), in bands of rows in parallel.
//! Every result depends on the input alone, not on the thread count.

use super::envelope::{Envelope, EnvelopeInt};
use crate::features::components::{pixel_count, FIXED};
use rayon::prelude::*;

/// Largest spread (pixels) done by dilating bit-packed rows; larger ones use the distance
/// transform. Both are exact; the dilation costs about px/6 word operations per pixel and ink,
/// the distance transform a few dozen operations per pixel and ink whatever px.
const BITS_MAX_PX: u32 = 32;

/// Largest image side (pixels) for which the `i64` envelope arithmetic cannot overflow (all
/// products stay below 2⁵³); larger images use `i128`.
const I64_MAX_SIDE: usize = 1 << 16;

/// Default number of pixels per band of rows in [`trap`].
const BAND_PIXELS: usize = 1 << 18;

/// Rank of a label that neither spreads nor receives.
const NO_RANK: u16 = u16::MAX;

/// Up to this many inks, [`trap`] handles every ink in every band (cheap when absent); beyond,
/// it first finds which labels occur near each band.
const FEW_INKS: usize = 16;

/// Trapping for print: each ink spreads by `px` pixels (Euclidean distance between pixel centres
/// <= px) into neighbouring regions of DARKER inks only. `lightness[l]` is the CIELAB L* of label l;
/// `is_ink[l]` is false for labels that are not inks (e.g. the bare substrate), which neither spread
/// nor receive spread. FIXED pixels never receive. Returns one coverage mask per label
/// (`masks[l][p] == true` where plate l prints pixel p): its own pixels (if is_ink[l]) plus spread
/// pixels. Equal lightness: neither spreads into the other. px = 0 → masks are exactly the own pixels
/// (mutually exclusive). Use an exact Euclidean distance transform (Felzenszwalb & Huttenlocher) per
/// ink, or another exact method; must be O(pixels) per ink, fast on 24-megapixel images.
///
/// Details:
/// - There are `is_ink.len()` masks, each of `labels.len()` pixels. Labels at or beyond
///   `is_ink.len()`, and [`FIXED`], are treated as non-inks. A non-ink's mask is all false.
/// - An ink with no `lightness` entry, or a NaN one, neither spreads nor receives.
/// - Ink `l` adds pixel `p` when `p`'s label is an ink strictly darker than `l` and some pixel of
///   `l` lies within `px` pixels of `p`: straight-line distance between centres, whatever lies in
///   between (so a spread can reach across a gap of substrate narrower than `px`).
/// - When `labels.len() != width * height` the geometry is unknown: the masks are the own pixels.
///
/// Method and cost: both exact, O(pixels) per ink present, in parallel bands of rows. Up to
/// px = 32: each row of the ink is bit-packed and dilated by the digital disc (row offset dy gets
/// a run of ±⌊√(px² − dy²)⌋ pixels). Beyond: the Felzenszwalb & Huttenlocher 2012 distance
/// transform, with the column distances capped at px + 1. Memory: the masks, plus per thread a
/// few bytes per pixel of one band.
pub fn trap(
    labels: &[u16],
    width: usize,
    height: usize,
    lightness: &[f64],
    is_ink: &[bool],
    px: u32,
) -> Vec<Vec<bool>> {
    trap_impl(
        labels,
        width,
        height,
        lightness,
        is_ink,
        px,
        None,
        Method::Auto,
    )
}

/// How [`trap_impl`] finds the pixels within reach (every choice gives the same masks).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Method {
    /// Bit-packed dilation up to [`BITS_MAX_PX`] pixels, the distance transform beyond.
    Auto,
    Bits,
    /// The distance transform with `i128` arithmetic when `wide`, else `i64`.
    Envelope {
        wide: bool,
    },
}

/// [`trap`] with test hooks: `band_rows` overrides the band height, `method` the method.
#[allow(clippy::too_many_arguments)]
fn trap_impl(
    labels: &[u16],
    width: usize,
    height: usize,
    lightness: &[f64],
    is_ink: &[bool],
    px: u32,
    band_rows: Option<usize>,
    method: Method,
) -> Vec<Vec<bool>> {
    let n = labels.len();
    let nl = is_ink.len();
    let mut masks: Vec<Vec<bool>> = (0..nl).map(|_| vec![false; n]).collect();
    if n == 0 || nl == 0 {
        return masks;
    }
    let (w, h, px) = match pixel_count(n, width, height) {
        Some(_) => (width, height, px),
        None => (n, 1, 0),
    };
    // No two pixel centres are farther apart than (w - 1) + (h - 1), so a larger px changes
    // nothing; the cap also keeps px + 1 inside u32.
    let reach = ((w - 1) as u64 + (h - 1) as u64).min(u32::MAX as u64 - 2);
    let px = (px as u64).min(reach) as u32;

    // `own[m]`: label m is an ink (has its own pixels). FIXED never is.
    let mut own = vec![false; 1 << 16];
    for (m, &b) in is_ink.iter().enumerate().take(FIXED as usize) {
        own[m] = b;
    }
    // `rank[m]`: position of ink m in order of lightness (equal lightness, equal rank), so that
    // ink l spreads into label m exactly when rank[m] < rank[l]. NO_RANK for everything else.
    let mut rank = vec![NO_RANK; 1 << 16];
    let mut by_lightness: Vec<(f64, usize)> = (0..nl.min(FIXED as usize))
        .filter(|&m| own[m])
        .filter_map(|m| lightness.get(m).map(|&v| (v, m)))
        .filter(|(v, _)| !v.is_nan())
        .collect();
    by_lightness.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let mut r = 0u16;
    for (i, &(v, m)) in by_lightness.iter().enumerate() {
        if i > 0 && v > by_lightness[i - 1].0 {
            r += 1;
        }
        rank[m] = r;
    }
    let inks: Vec<u16> = (0..nl.min(FIXED as usize))
        .filter(|&m| own[m])
        .map(|m| m as u16)
        .collect();
    let spreaders: Vec<u16> = if px == 0 {
        Vec::new()
    } else {
        inks.iter()
            .copied()
            .filter(|&l| rank[l as usize] != NO_RANK && rank[l as usize] > 0)
            .collect()
    };

    let method = match method {
        Method::Auto if px <= BITS_MAX_PX => Method::Bits,
        Method::Auto => Method::Envelope {
            wide: w.max(h) > I64_MAX_SIDE,
        },
        m => m,
    };
    // Half-width of the digital disc at row offset d: the largest r with r² + d² <= px². Only
    // the bit-packed method uses it, and there px <= BITS_MAX_PX.
    let p2 = px as u64 * px as u64;
    let disc_rows = if method == Method::Bits {
        px as u64 + 1
    } else {
        0
    };
    let half: Vec<u32> = (0..disc_rows)
        .map(|d| {
            let mut r = ((p2 - d * d) as f64).sqrt() as u64;
            while r * r + d * d > p2 {
                r -= 1;
            }
            while (r + 1) * (r + 1) + d * d <= p2 {
                r += 1;
            }
            r as u32
        })
        .collect();
    let mut radii = half.clone();
    radii.sort_unstable();
    radii.dedup();
    let slot: Vec<usize> = half
        .iter()
        .map(|r| radii.binary_search(r).unwrap_or(0))
        .collect();

    let rows = band_rows
        .unwrap_or_else(|| (BAND_PIXELS / w).max(2 * px as usize))
        .clamp(1, h);
    let band_len = rows * w;
    let bands = h.div_ceil(rows);
    let mut per_band: Vec<Vec<&mut [bool]>> = (0..bands).map(|_| Vec::with_capacity(nl)).collect();
    for mask in masks.iter_mut() {
        for (b, chunk) in mask.chunks_mut(band_len).enumerate() {
            per_band[b].push(chunk);
        }
    }
    let job = Job {
        labels,
        w,
        h,
        rows,
        px,
        nl,
        own: &own,
        rank: &rank,
        inks: &inks,
        spreaders: &spreaders,
        method,
        radii: &radii,
        slot: &slot,
    };
    per_band
        .into_par_iter()
        .enumerate()
        .for_each_init(Scratch::default, |scratch, (b, mut chunks)| {
            job.band(b, &mut chunks, scratch)
        });
    masks
}

/// The shared, read-only part of one [`trap`] call.
struct Job<'a> {
    labels: &'a [u16],
    w: usize,
    h: usize,
    /// Rows per band.
    rows: usize,
    /// Spread distance (pixels), already capped to the image's extent.
    px: u32,
    /// Number of masks.
    nl: usize,
    /// Indexed by label (2¹⁶ entries): is an ink, and lightness rank (see [`trap_impl`]).
    own: &'a [bool],
    rank: &'a [u16],
    /// The inks, and the inks that have a darker ink to spread into (none when px = 0).
    inks: &'a [u16],
    spreaders: &'a [u16],
    /// `Bits` or `Envelope`, never `Auto`.
    method: Method,
    /// The distinct disc half-widths, ascending, and the index in it for each row offset 0..=px.
    radii: &'a [u32],
    slot: &'a [usize],
}

/// Per-thread buffers for [`Job::band`].
#[derive(Default)]
struct Scratch {
    /// Labels seen (indexed by label).
    seen: Vec<bool>,
    /// Lightness ranks of the band's pixels.
    ranks: Vec<u16>,
    /// The spreading ink's rows (band and margins), bit-packed: `[row][word]`.
    bits: Vec<u64>,
    /// Those rows dilated by each disc half-width: `[radius][row][word]`.
    dilated: Vec<u64>,
    /// Row buffers (words).
    a: Vec<u64>,
    b: Vec<u64>,
    reach: Vec<u64>,
    target: Vec<u64>,
    /// Column distance (pixels, capped at px + 1) to the spreading ink, for the band's rows.
    g: Vec<u32>,
    /// The running column distances of one scan.
    cur: Vec<u32>,
    env64: Envelope<i64>,
    env128: Envelope<i128>,
}

/// Packs a predicate over one row: bit `i % 64` of `dst[i / 64]` is `keep(src[i])`, and bits
/// past the end of `src` are 0. Each block of 64 is compared into bytes (which vectorises) and
/// every 8 bytes of 0/1 become 8 bits with one multiplication. Returns whether any bit is set.
#[inline]
fn pack_with<T: Copy>(src: &[T], dst: &mut [u64], keep: impl Fn(T) -> bool) -> bool {
    let mut any = 0;
    let mut blocks = src.chunks_exact(64);
    let mut words = dst.iter_mut();
    for (block, word) in (&mut blocks).zip(&mut words) {
        let mut bytes = [0u8; 64];
        for (b, &v) in bytes.iter_mut().zip(block) {
            *b = u8::from(keep(v));
        }
        let mut bits = 0u64;
        for (k, eight) in bytes.chunks_exact(8).enumerate() {
            let v = u64::from_le_bytes(eight.try_into().unwrap_or([0; 8]));
            // Byte i (0 or 1) lands on bit 56 + i; no two partial products overlap.
            bits |= (v.wrapping_mul(0x0102_0408_1020_4080) >> 56) << (8 * k);
        }
        *word = bits;
        any |= bits;
    }
    let mut tail = 0u64;
    for (i, &v) in blocks.remainder().iter().enumerate() {
        tail |= u64::from(keep(v)) << i;
    }
    for word in words {
        *word = tail;
        any |= tail;
        tail = 0;
    }
    any != 0
}

/// `dst` = `src` dilated by one pixel left and right (bit i of word k is pixel 64k + i).
fn dilate_row(src: &[u64], dst: &mut [u64]) {
    let n = src.len();
    for k in 0..n {
        let x = src[k];
        let from_left = if k > 0 { src[k - 1] >> 63 } else { 0 };
        let from_right = if k + 1 < n { src[k + 1] << 63 } else { 0 };
        dst[k] = x | (x << 1) | from_left | (x >> 1) | from_right;
    }
}

impl Job<'_> {
    /// Fills band `b` (rows `b * rows ..`) of every mask; `chunks[l]` is that part of mask `l`.
    fn band(&self, b: usize, chunks: &mut [&mut [bool]], s: &mut Scratch) {
        let (w, h) = (self.w, self.h);
        let r0 = b * self.rows;
        let r1 = (r0 + self.rows).min(h);
        let band_labels = &self.labels[r0 * w..r1 * w];
        let few = self.inks.len() <= FEW_INKS;
        // Own pixels: a vectorised compare per ink, or one pass when there are many inks.
        if few {
            for &l in self.inks {
                for (o, &m) in chunks[l as usize].iter_mut().zip(band_labels) {
                    *o = m == l;
                }
            }
        } else {
            for (i, &m) in band_labels.iter().enumerate() {
                if self.own[m as usize] {
                    chunks[m as usize][i] = true;
                }
            }
        }
        if self.spreaders.is_empty() {
            return;
        }
        // Pixels more than px rows away cannot reach the band.
        let margin = self.px as usize;
        let h0 = r0.saturating_sub(margin);
        let h1 = (r1 + margin).min(h);
        // With many inks, only those present near the band and lighter than an ink present in
        // the band are worth looking at; with few, absent inks cost little (their rows are
        // empty and skipped).
        let active: Vec<u16> = if few {
            self.spreaders.to_vec()
        } else {
            s.seen.clear();
            s.seen.resize(1 << 16, false);
            for &m in band_labels {
                s.seen[m as usize] = true;
            }
            let darkest = (0..self.nl.min(1 << 16))
                .filter(|&m| s.seen[m])
                .map(|m| self.rank[m])
                .min()
                .unwrap_or(NO_RANK);
            for &m in self.labels[h0 * w..r0 * w]
                .iter()
                .chain(&self.labels[r1 * w..h1 * w])
            {
                s.seen[m as usize] = true;
            }
            self.spreaders
                .iter()
                .copied()
                .filter(|&l| s.seen[l as usize] && darkest < self.rank[l as usize])
                .collect()
        };
        match self.method {
            Method::Envelope { wide: false } => {
                for &l in &active {
                    self.spread_envelope(
                        r0,
                        r1,
                        h0,
                        h1,
                        l,
                        chunks,
                        &mut s.g,
                        &mut s.cur,
                        &mut s.env64,
                    );
                }
            }
            // The same call on 128-bit envelope words (deliberate twin: the word type is a
            // type parameter, and each arm names its own scratch buffer).
            Method::Envelope { wide: true } => {
                for &l in &active {
                    self.spread_envelope(
                        r0,
                        r1,
                        h0,
                        h1,
                        l,
                        chunks,
                        &mut s.g,
                        &mut s.cur,
                        &mut s.env128,
                    );
                }
            }
            Method::Bits | Method::Auto => self.spread_bits(r0, r1, h0, h1, &active, chunks, s),
        }
    }

    /// Bit-packed spreading of the `active` inks for the band rows `r0..r1`, with margin rows
    /// `h0..h1`.
    #[allow(clippy::too_many_arguments)]
    fn spread_bits(
        &self,
        r0: usize,
        r1: usize,
        h0: usize,
        h1: usize,
        active: &[u16],
        chunks: &mut [&mut [bool]],
        s: &mut Scratch,
    ) {
        let w = self.w;
        let words = w.div_ceil(64);
        let rows = h1 - h0;
        let px = self.px as usize;
        let row_at = |k: usize, row: usize| (k * rows + row) * words;
        s.ranks.clear();
        s.ranks.extend(
            self.labels[r0 * w..r1 * w]
                .iter()
                .map(|&m| self.rank[m as usize]),
        );
        s.a.resize(words, 0);
        s.b.resize(words, 0);
        s.reach.resize(words, 0);
        s.target.resize(words, 0);

        for &l in active {
            let rank = self.rank[l as usize];
            // The ink's rows, bit-packed, then dilated by every disc half-width.
            s.bits.clear();
            s.bits.resize(rows * words, 0);
            s.dilated.clear();
            s.dilated.resize(self.radii.len() * rows * words, 0);
            let mut present = false;
            for j in 0..rows {
                let lab = &self.labels[(h0 + j) * w..(h0 + j + 1) * w];
                if !pack_with(lab, &mut s.bits[j * words..(j + 1) * words], |m| m == l) {
                    continue;
                }
                present = true;
                s.a.copy_from_slice(&s.bits[j * words..(j + 1) * words]);
                let mut radius = 0;
                for (k, &r) in self.radii.iter().enumerate() {
                    while radius < r {
                        dilate_row(&s.a, &mut s.b);
                        std::mem::swap(&mut s.a, &mut s.b);
                        radius += 1;
                    }
                    s.dilated[row_at(k, j)..row_at(k, j) + words].copy_from_slice(&s.a);
                }
            }
            if !present {
                continue;
            }
            let mask = &mut *chunks[l as usize];
            for y in r0..r1 {
                // Rows y - px ..= y + px within the margins, each dilated by its half-width.
                s.reach.fill(0);
                for yy in y.saturating_sub(px).max(h0)..(y + px + 1).min(h1) {
                    let p = row_at(self.slot[y.abs_diff(yy)], yy - h0);
                    for (t, &x) in s.reach.iter_mut().zip(&s.dilated[p..p + words]) {
                        *t |= x;
                    }
                }
                if s.reach.iter().all(|&x| x == 0) {
                    continue;
                }
                // Pixels of darker inks.
                let ranks = &s.ranks[(y - r0) * w..(y - r0 + 1) * w];
                if !pack_with(ranks, &mut s.target, |r| r < rank) {
                    continue;
                }
                let out = &mut mask[(y - r0) * w..(y - r0 + 1) * w];
                for (k, (&t, &r)) in s.target.iter().zip(&s.reach).enumerate() {
                    let mut hit = t & r;
                    while hit != 0 {
                        out[k * 64 + hit.trailing_zeros() as usize] = true;
                        hit &= hit - 1;
                    }
                }
            }
        }
    }

    /// Distance-transform spreading of ink `l` for the band rows `r0..r1` (margins `h0..h1`).
    #[allow(clippy::too_many_arguments)]
    fn spread_envelope<T: EnvelopeInt>(
        &self,
        r0: usize,
        r1: usize,
        h0: usize,
        h1: usize,
        l: u16,
        chunks: &mut [&mut [bool]],
        g: &mut Vec<u32>,
        cur: &mut Vec<u32>,
        env: &mut Envelope<T>,
    ) {
        let w = self.w;
        let cap = self.px + 1;
        let px2 = T::from(self.px as i64 * self.px as i64);
        // Column distance to the nearest pixel of l, capped at px + 1 ("too far"): a scan down
        // from px rows above the band, then a scan up from px rows below it.
        g.clear();
        g.resize((r1 - r0) * w, cap);
        cur.clear();
        cur.resize(w, cap);
        for y in h0..r1 {
            let lab = &self.labels[y * w..(y + 1) * w];
            for (c, &m) in cur.iter_mut().zip(lab) {
                *c = if m == l { 0 } else { (*c + 1).min(cap) };
            }
            if y >= r0 {
                g[(y - r0) * w..(y - r0 + 1) * w].copy_from_slice(cur);
            }
        }
        cur.fill(cap);
        for y in (r0..h1).rev() {
            let lab = &self.labels[y * w..(y + 1) * w];
            for (c, &m) in cur.iter_mut().zip(lab) {
                *c = if m == l { 0 } else { (*c + 1).min(cap) };
            }
            if y < r1 {
                for (d, &c) in g[(y - r0) * w..(y - r0 + 1) * w].iter_mut().zip(cur.iter()) {
                    *d = (*d).min(c);
                }
            }
        }
        let mask = &mut *chunks[l as usize];
        let rank = self.rank[l as usize];
        for i in 0..r1 - r0 {
            let row = (r0 + i) * w;
            env.spread_row(
                &g[i * w..(i + 1) * w],
                cap,
                &self.labels[row..row + w],
                |m| self.rank[m as usize] < rank,
                px2,
                &mut mask[i * w..(i + 1) * w],
            );
        }
    }
}

#[cfg(test)]
#[path = "trap_tests.rs"]
mod tests;
