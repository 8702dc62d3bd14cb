//! Exact weighted table of distinct colours, with the pixel → entry index used to render.

use crate::colour::profile::{SourceProfile, ToLinear};
use rayon::prelude::*;
use std::sync::Arc;

/// Entry index of a pixel that takes no part (alpha = 0).
pub const TRANSPARENT: u32 = u32::MAX;

/// Most pixels one histogram may count in all: 2⁵³ (about 9 × 10¹⁵), so that every count
/// and every sum of counts is exact as an f64 clustering weight. Histogram files and
/// merges that would go past it are refused.
pub const MAX_TOTAL: u64 = 1 << 53;

/// Distinct colours of an image (or of many) with their pixel counts.
///
/// Each entry is a colour's numbers and, when they are not sRGB, the colour profile they
/// are read through (an image's embedded ICC profile), so images of different profiles
/// can share one table and every entry keeps its own colour. Entries are sorted by
/// profile (sRGB first, then the profiles in the order of their ICC bytes) and then by
/// colour value (R, then G, then B), so the table is the same whatever the pixel order,
/// merge order or thread count.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Histogram {
    /// Sample depth of `colours`: 8 or 16 bits.
    pub depth: u8,
    /// Distinct colours' numbers (at `depth` bits, stored as u16).
    pub colours: Vec<[u16; 3]>,
    /// Pixels of each colour.
    pub counts: Vec<u64>,
    /// The profiles (other than sRGB) some entries are in, each once (by ICC bytes), in
    /// the order of their ICC bytes, each used by at least one entry.
    pub profiles: Vec<Arc<SourceProfile>>,
    /// Per entry: 0 when its numbers are sRGB, otherwise 1 + the index of its profile in
    /// `profiles`. Empty when `profiles` is (every entry sRGB).
    pub entry_profile: Vec<u32>,
}

/// A histogram plus, for every pixel, the index of its entry (or [`TRANSPARENT`]).
#[derive(Debug, Clone, PartialEq)]
pub struct IndexedHistogram {
    pub histogram: Histogram,
    pub pixel_entry: Vec<u32>,
}

impl Histogram {
    /// Number of distinct colours.
    pub fn len(&self) -> usize {
        self.colours.len()
    }
    /// True when no pixel took part.
    pub fn is_empty(&self) -> bool {
        self.colours.is_empty()
    }
    /// Pixels counted (saturating at `u64::MAX`; the histograms this crate builds or
    /// reads stay within [`MAX_TOTAL`]).
    pub fn total(&self) -> u64 {
        self.counts.iter().fold(0u64, |a, &c| a.saturating_add(c))
    }
    /// A reader of the entries' colours as linear sRGB (unbounded: a colour of a wider
    /// profile outside sRGB keeps its values below 0 or above 1).
    pub fn reader(&self) -> EntryReader<'_> {
        EntryReader {
            hist: self,
            convert: self.profiles.iter().map(|p| p.to_linear()).collect(),
        }
    }

    /// Profile number of entry `i`: 0 for sRGB, 1 + its index in `profiles` otherwise.
    pub fn profile_of(&self, i: usize) -> u32 {
        self.entry_profile.get(i).copied().unwrap_or(0)
    }

    /// The same entries read through `profile` (an image's embedded profile; `None`:
    /// sRGB). Meant for the histogram of one image, whose entries are all sRGB numbers.
    pub fn read_through(mut self, profile: Option<Arc<SourceProfile>>) -> Histogram {
        match profile {
            Some(p) if !self.is_empty() => {
                self.entry_profile = vec![1; self.len()];
                self.profiles = vec![p];
            }
            _ => {
                self.profiles.clear();
                self.entry_profile.clear();
            }
        }
        self
    }

    /// Scales the counts to sum to about `total`, each colour present keeping at least 1:
    /// the histogram then weighs as an image of `total` pixels, whatever its size.
    pub fn rescale_total(&mut self, total: u64) {
        let sum: u128 = self.counts.iter().map(|&c| c as u128).sum();
        if sum == 0 {
            return;
        }
        for c in self.counts.iter_mut().filter(|c| **c > 0) {
            let scaled = (*c as u128 * total as u128 + sum / 2) / sum;
            *c = scaled.clamp(1, u64::MAX as u128) as u64;
        }
    }

    /// Counts as f64 weights for clustering.
    pub fn weights(&self) -> Vec<f64> {
        self.counts.iter().map(|&c| c as f64).collect()
    }

    /// Merges histograms of the same depth (parts of one image, or several images, each
    /// entry staying with its profile). Counts saturate at `u64::MAX`; callers merging
    /// histograms from files check the sum against [`MAX_TOTAL`] first.
    pub fn merge(parts: &[Histogram]) -> Option<Histogram> {
        let depth = parts.first()?.depth;
        if parts.iter().any(|p| p.depth != depth) {
            return None;
        }
        // Every profile once, in the order of its ICC bytes.
        let mut profiles: Vec<Arc<SourceProfile>> = parts
            .iter()
            .flat_map(|p| p.profiles.iter().cloned())
            .collect();
        profiles.sort_by(|a, b| a.icc.cmp(&b.icc));
        profiles.dedup_by(|a, b| a.icc == b.icc);
        let number = |p: &Histogram, i: usize| match p.profile_of(i) {
            0 => 0,
            n => {
                let icc = &p.profiles[n as usize - 1].icc;
                1 + profiles
                    .binary_search_by(|q| q.icc.cmp(icc))
                    .expect("every profile was gathered") as u32
            }
        };
        let mut all: Vec<((u32, [u16; 3]), u64)> = parts
            .iter()
            .flat_map(|p| (0..p.len()).map(move |i| ((number(p, i), p.colours[i]), p.counts[i])))
            .collect();
        all.par_sort_unstable_by_key(|e| e.0);
        let mut keys: Vec<(u32, [u16; 3])> = Vec::new();
        let mut counts: Vec<u64> = Vec::new();
        for (k, n) in all {
            if keys.last() == Some(&k) {
                let last = counts.last_mut().unwrap();
                *last = last.saturating_add(n);
            } else {
                keys.push(k);
                counts.push(n);
            }
        }
        // Keep only the profiles some entry uses, renumbered in the same order.
        let mut used = vec![false; profiles.len() + 1];
        for k in &keys {
            used[k.0 as usize] = true;
        }
        let mut renumber = vec![0u32; profiles.len() + 1];
        let mut kept = Vec::new();
        for (i, p) in profiles.into_iter().enumerate() {
            if used[i + 1] {
                kept.push(p);
                renumber[i + 1] = kept.len() as u32;
            }
        }
        let entry_profile = if kept.is_empty() {
            Vec::new()
        } else {
            keys.iter().map(|k| renumber[k.0 as usize]).collect()
        };
        Some(Histogram {
            depth,
            colours: keys.into_iter().map(|k| k.1).collect(),
            counts,
            profiles: kept,
            entry_profile,
        })
    }
}

/// Reads a histogram's entries as linear sRGB, each through its profile.
pub struct EntryReader<'a> {
    hist: &'a Histogram,
    convert: Vec<ToLinear<'a>>,
}

impl EntryReader<'_> {
    /// Linear sRGB of entry `i` (0..1 for sRGB entries; unbounded for others).
    pub fn linear(&self, i: usize) -> [f64; 3] {
        let h = self.hist;
        let c = h.colours[i];
        match h.profile_of(i) {
            0 if h.depth == 8 => {
                crate::colour::srgb8_to_linear([c[0] as u8, c[1] as u8, c[2] as u8])
            }
            0 => crate::colour::srgb16_to_linear(c),
            n => {
                let scale = if h.depth == 8 { 255.0 } else { 65535.0 };
                self.convert[n as usize - 1].linear(c.map(|v| v as f64 / scale))
            }
        }
    }
}

/// Histogram of 8-bit RGBA pixels (`rgba.len() = 4 × pixels`); alpha = 0 is left out.
///
/// Uses a dense 2²⁴ table (zero-initialised lazily by the OS, so only pages of colours
/// present are touched) and a presence bitmap, so counting is one pass at memory speed.
pub fn from_rgba8(rgba: &[u8]) -> IndexedHistogram {
    // With `keep_tables(true)` the 64 MiB count table is kept per thread between calls
    // (and cleared by touching only the entries used), so a batch of small images does
    // not pay for allocating and faulting in a fresh table each time.
    let (mut table, mut present) = TABLES
        .with(|t| t.borrow_mut().take())
        .unwrap_or_else(|| (vec![0u32; 1 << 24], vec![0u64; 1 << 18]));
    let result = count_rgba8(rgba, &mut table, &mut present);
    if KEEP_TABLES.load(std::sync::atomic::Ordering::Relaxed) {
        TABLES.with(|t| *t.borrow_mut() = Some((table, present)));
    }
    result
}

/// Whether [`from_rgba8`] keeps its 64 MiB count table per thread for the next call.
/// Off by default, so a single image frees the table (about 66 MB resident) before the
/// rest of the work allocates; `batch` turns it on, where the reuse saves a fresh
/// table's page faults for every image.
static KEEP_TABLES: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Keeps (or stops keeping) [`from_rgba8`]'s count table per thread between calls.
pub fn keep_tables(keep: bool) {
    KEEP_TABLES.store(keep, std::sync::atomic::Ordering::Relaxed);
    if !keep {
        TABLES.with(|t| t.borrow_mut().take());
    }
}

/// Keeps the count tables while it lives, then puts the previous setting back (so a
/// library caller's later single images free their table again).
pub struct KeepTables(bool);

impl KeepTables {
    /// Turns keeping on until the guard is dropped.
    pub fn new() -> Self {
        let before = KEEP_TABLES.swap(true, std::sync::atomic::Ordering::Relaxed);
        KeepTables(before)
    }
}

impl Default for KeepTables {
    fn default() -> Self {
        Self::new()
    }
}

impl Drop for KeepTables {
    fn drop(&mut self) {
        keep_tables(self.0);
        if !self.0 {
            // The tables kept by the current pool's worker threads go too.
            rayon::broadcast(|_| TABLES.with(|t| t.borrow_mut().take()));
        }
    }
}

thread_local! {
    /// Cleared count table and presence bitmap reused by [`from_rgba8`].
    #[allow(clippy::type_complexity)]
    static TABLES: std::cell::RefCell<Option<(Vec<u32>, Vec<u64>)>> =
        const { std::cell::RefCell::new(None) };
}

/// Counts into all-zero `table`/`present` and leaves them all-zero again.
fn count_rgba8(rgba: &[u8], table: &mut [u32], present: &mut [u64]) -> IndexedHistogram {
    for p in rgba.chunks_exact(4) {
        if p[3] == 0 {
            continue;
        }
        let key = (p[0] as usize) << 16 | (p[1] as usize) << 8 | p[2] as usize;
        table[key] += 1;
        present[key >> 6] |= 1 << (key & 63);
    }
    let mut colours = Vec::new();
    let mut counts = Vec::new();
    for (wi, word) in present.iter_mut().enumerate() {
        let mut bits = std::mem::take(word);
        while bits != 0 {
            let b = bits.trailing_zeros() as usize;
            bits &= bits - 1;
            let key = wi << 6 | b;
            counts.push(table[key] as u64);
            table[key] = colours.len() as u32;
            colours.push([
                (key >> 16) as u16,
                ((key >> 8) & 255) as u16,
                (key & 255) as u16,
            ]);
        }
    }
    let mut pixel_entry = vec![0u32; rgba.len() / 4];
    pixel_entry
        .par_chunks_mut(1 << 16)
        .zip(rgba.par_chunks(4 << 16))
        .for_each(|(out, px)| {
            for (o, p) in out.iter_mut().zip(px.chunks_exact(4)) {
                *o = if p[3] == 0 {
                    TRANSPARENT
                } else {
                    table[(p[0] as usize) << 16 | (p[1] as usize) << 8 | p[2] as usize]
                };
            }
        });
    for c in &colours {
        table[(c[0] as usize) << 16 | (c[1] as usize) << 8 | c[2] as usize] = 0;
    }
    IndexedHistogram {
        histogram: Histogram {
            depth: 8,
            colours,
            counts,
            ..Histogram::default()
        },
        pixel_entry,
    }
}

/// Histogram of 16-bit RGBA pixels (`rgba.len() = 4 × pixels`); alpha = 0 is left out.
/// Exact (sort and count); distinct colours are often nearly as many as pixels.
pub fn from_rgba16(rgba: &[u16]) -> IndexedHistogram {
    let key = |p: &[u16]| (p[0] as u64) << 32 | (p[1] as u64) << 16 | p[2] as u64;
    let mut keys: Vec<u64> = rgba
        .par_chunks_exact(4)
        .filter(|p| p[3] != 0)
        .map(key)
        .collect();
    keys.par_sort_unstable();
    let mut uniq: Vec<u64> = Vec::new();
    let mut counts: Vec<u64> = Vec::new();
    for k in keys {
        if uniq.last() == Some(&k) {
            *counts.last_mut().unwrap() += 1;
        } else {
            uniq.push(k);
            counts.push(1);
        }
    }
    let pixel_entry: Vec<u32> = rgba
        .par_chunks_exact(4)
        .map(|p| {
            if p[3] == 0 {
                TRANSPARENT
            } else {
                uniq.binary_search(&key(p)).expect("every key was counted") as u32
            }
        })
        .collect();
    let colours = uniq
        .iter()
        .map(|&k| {
            [
                (k >> 32) as u16,
                ((k >> 16) & 0xffff) as u16,
                (k & 0xffff) as u16,
            ]
        })
        .collect();
    IndexedHistogram {
        histogram: Histogram {
            depth: 16,
            colours,
            counts,
            ..Histogram::default()
        },
        pixel_entry,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_and_index_by_hand() {
        // Four pixels: red, blue, red, transparent green.
        let px = [255, 0, 0, 255, 0, 0, 255, 255, 255, 0, 0, 128, 0, 255, 0, 0];
        let h = from_rgba8(&px);
        assert_eq!(h.histogram.colours, vec![[0, 0, 255], [255, 0, 0]]);
        assert_eq!(h.histogram.counts, vec![1, 2]);
        assert_eq!(h.pixel_entry, vec![1, 0, 1, TRANSPARENT]);
        assert_eq!(h.histogram.total(), 3);
    }

    #[test]
    fn sixteen_bit_counts() {
        let px = [1u16, 2, 3, 65535, 1, 2, 3, 1, 9, 9, 9, 0];
        let h = from_rgba16(&px);
        assert_eq!(h.histogram.colours, vec![[1, 2, 3]]);
        assert_eq!(h.histogram.counts, vec![2]);
        assert_eq!(h.pixel_entry, vec![0, 0, TRANSPARENT]);
    }

    #[test]
    fn rescaled_counts_keep_their_proportions_and_every_colour() {
        let rgba = |n: usize, c: [u8; 3]| -> Vec<u8> {
            (0..n).flat_map(|_| [c[0], c[1], c[2], 255]).collect()
        };
        let mut px = rgba(3, [1, 2, 3]);
        px.extend(rgba(1, [9, 9, 9]));
        let mut h = from_rgba8(&px).histogram;
        h.rescale_total(1000);
        assert_eq!(h.counts, vec![750, 250]);
        let mut px = rgba(999, [1, 2, 3]);
        px.extend(rgba(1, [5, 5, 5]));
        let mut h = from_rgba8(&px).histogram;
        h.rescale_total(10);
        // 1 of 1000 pixels scales to 0.01: kept at 1, not dropped.
        assert_eq!(h.counts, vec![10, 1]);
    }

    #[test]
    fn merge_of_halves_equals_whole() {
        let px: Vec<u8> = (0..4000u32)
            .flat_map(|i| [(i % 7) as u8 * 30, (i % 5) as u8, 9, 255])
            .collect();
        let whole = from_rgba8(&px).histogram;
        let a = from_rgba8(&px[..1600]).histogram;
        let b = from_rgba8(&px[1600..]).histogram;
        assert_eq!(Histogram::merge(&[a, b]).unwrap(), whole);
    }
}
