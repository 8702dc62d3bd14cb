//! Regions of a label image, and the two clean-ups that ink separation for screen printing needs:
//! merging regions too small to print into a neighbour, and trapping (each ink spreading a few
//! pixels under its darker neighbours).
//!
//! A label image is `width × height` labels (`u16`) in raster order: row by row, top row first,
//! so pixel `(x, y)` is at index `y * width + x`. Connectivity is 8-neighbour throughout. Pixels
//! labelled [`FIXED`] take no part. Every size, area and distance here is in pixels.
//!
//! Nothing here recurses. Regions are found by run-based union-find labelling (bands of rows in
//! parallel), and merging uses flood fills with an explicit stack. Trapping is exact: for spreads
//! up to 32 pixels it dilates bit-packed rows of each ink by a digital disc (64 pixels per word
//! operation); beyond that it uses the Euclidean distance transform of Felzenszwalb & Huttenlocher
//! 2012 (a capped column scan, then the lower envelope of parabolas along each row, in exact
//! integer arithmetic), in bands of rows in parallel. Every result depends on the input alone, not
//! on the thread count.

use rayon::prelude::*;
use std::ops::{Add, Mul, Sub};

/// Label of a pixel that is fixed: never changed, never merged into, never trapped (e.g. transparent).
pub const FIXED: u16 = u16::MAX;

/// What [`merge_small_regions`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct MergeStats {
    /// Number of merges: each one relabels a whole region (of fewer than `min_area` pixels) to
    /// the label of a neighbour.
    pub merged: usize,
    /// Regions still smaller than `min_area` pixels at the end. Each of them touches only
    /// [`FIXED`] pixels and the image edge, so there was nothing to merge it into.
    pub kept_isolated: usize,
    /// Passes over the image's regions: 1 whenever anything was examined (one pass always
    /// suffices; see [`merge_small_regions`]), 0 when nothing was (`min_area <= 1`, an empty
    /// image, or a label slice whose length is not `width * height`).
    pub passes: usize,
}

/// `Some(width * height)` when the label slice has exactly that many pixels.
fn pixel_count(len: usize, width: usize, height: usize) -> Option<usize> {
    width.checked_mul(height).filter(|&n| n == len)
}

/// Writes the in-bounds 8-neighbours of pixel `p` into `out` and returns how many there are.
/// `width` and `height` are at least 1 and `p < width * height`.
#[inline]
fn neighbours8(p: usize, width: usize, height: usize, out: &mut [usize; 8]) -> usize {
    let x = p % width;
    let y = p / width;
    if x > 0 && x + 1 < width && y > 0 && y + 1 < height {
        *out = [
            p - width - 1,
            p - width,
            p - width + 1,
            p - 1,
            p + 1,
            p + width - 1,
            p + width,
            p + width + 1,
        ];
        return 8;
    }
    let x0 = x.saturating_sub(1);
    let x1 = (x + 1).min(width - 1);
    let y0 = y.saturating_sub(1);
    let y1 = (y + 1).min(height - 1);
    let mut k = 0;
    for yy in y0..=y1 {
        for xx in x0..=x1 {
            if xx != x || yy != y {
                out[k] = yy * width + xx;
                k += 1;
            }
        }
    }
    k
}

// ---------------------------------------------------------------------------------------------
// Connected regions
// ---------------------------------------------------------------------------------------------

/// An index type for the per-run arrays: `u32` for images up to 2³² − 1 pixels, `usize` above.
trait PixelIndex: Copy + Ord + Send + Sync {
    fn from_usize(i: usize) -> Self;
    fn get(self) -> usize;
}

impl PixelIndex for u32 {
    #[inline]
    fn from_usize(i: usize) -> Self {
        i as u32
    }
    #[inline]
    fn get(self) -> usize {
        self as usize
    }
}

impl PixelIndex for usize {
    #[inline]
    fn from_usize(i: usize) -> Self {
        i
    }
    #[inline]
    fn get(self) -> usize {
        self
    }
}

/// Root of `x` with path halving. Every parent index is at most its child's index, so a root is
/// the smallest index of its set.
#[inline]
fn find<I: PixelIndex>(parent: &mut [I], mut x: usize) -> usize {
    loop {
        let p = parent[x].get();
        if p == x {
            return x;
        }
        let gp = parent[p].get();
        if gp == p {
            return p;
        }
        parent[x] = I::from_usize(gp);
        x = gp;
    }
}

/// Joins the sets of `a` and `b`; the root with the smaller index becomes the root of both.
#[inline]
fn union<I: PixelIndex>(parent: &mut [I], a: usize, b: usize) {
    let ra = find(parent, a);
    let rb = find(parent, b);
    if ra < rb {
        parent[rb] = I::from_usize(ra);
    } else if rb < ra {
        parent[ra] = I::from_usize(rb);
    }
}

/// Rows per band when labelling in parallel (about 2¹⁸ pixels per band). The result does not
/// depend on it.
fn label_band_rows(width: usize) -> usize {
    ((1 << 18) / width.max(1)).max(1)
}

/// Number of runs (maximal stretches of one label, FIXED ones included) in `rows`.
fn count_runs(rows: &[u16], width: usize) -> usize {
    rows.chunks(width)
        .map(|row| 1 + row.windows(2).filter(|p| p[0] != p[1]).count())
        .sum()
}

/// Joins each run of row `y` (runs `here`) to the runs of its label in row `y - 1` (runs
/// `above`, just before `here`) that touch it: overlapping, or meeting at a corner. Indices are
/// into `start` and `parent`, which may be a band's part of the whole arrays; `start[r]` is the
/// pixel index where run `r` begins.
fn join_rows<I: PixelIndex>(
    labels: &[u16],
    width: usize,
    y: usize,
    start: &[I],
    above: std::ops::Range<usize>,
    here: std::ops::Range<usize>,
    parent: &mut [I],
) {
    let (above_base, base) = ((y - 1) * width, y * width);
    // End of run r (exclusive, as a column), which is the start of the next run in its row.
    let end = |r: usize, last: usize, row_base: usize| {
        if r + 1 < last {
            start[r + 1].get() - row_base
        } else {
            width
        }
    };
    let mut j = above.start;
    for c in here.clone() {
        let l = labels[start[c].get()];
        if l == FIXED {
            continue;
        }
        let cs = start[c].get() - base;
        let ce = end(c, here.end, base);
        // Runs above ending before column cs - 1 touch neither this run nor any later one.
        while j < above.end && end(j, above.end, above_base) < cs {
            j += 1;
        }
        let mut k = j;
        while k < above.end && start[k].get() - above_base <= ce {
            if labels[start[k].get()] == l {
                union(parent, c, k);
            }
            k += 1;
        }
    }
}

/// Calls `visit(label, size, first)` for every 8-connected region ([`FIXED`] excluded), in
/// raster order of the regions' first pixels. `labels.len() == width * height`. `band_rows`
/// rows are labelled together (see [`label_band_rows`]).
///
/// Run-based labelling: every row is cut into runs of one label, and each run is joined
/// (union-find) to the runs of its label in the row above that touch it. Bands of rows are cut
/// and joined in parallel, then joined to each other; a final pass in raster order numbers the
/// regions. Memory: two indices per run (at most 8 bytes per pixel).
fn components<I: PixelIndex>(
    labels: &[u16],
    width: usize,
    height: usize,
    band_rows: usize,
    mut visit: impl FnMut(u16, usize, usize),
) {
    let n = labels.len();
    if n == 0 {
        return;
    }
    let band_rows = band_rows.clamp(1, height);
    let band_len = band_rows * width;
    let counts: Vec<usize> = labels
        .par_chunks(band_len)
        .map(|rows| count_runs(rows, width))
        .collect();
    let runs: usize = counts.iter().sum();

    // Runs cover every row completely (FIXED runs included, skipped later), so a run ends where
    // the next one starts; `start[runs] == n`. `row_first[y]` is the first run of row y.
    let mut start: Vec<I> = vec![I::from_usize(0); runs + 1];
    let mut parent: Vec<I> = vec![I::from_usize(0); runs];
    let mut row_first: Vec<usize> = vec![0; height + 1];
    {
        let mut parts = Vec::with_capacity(counts.len());
        let (mut start_rest, mut parent_rest) = (&mut start[..runs], &mut parent[..]);
        let mut offset = 0;
        for (&count, rows) in counts.iter().zip(row_first[..height].chunks_mut(band_rows)) {
            let (s, s_rest) = std::mem::take(&mut start_rest).split_at_mut(count);
            let (p, p_rest) = std::mem::take(&mut parent_rest).split_at_mut(count);
            start_rest = s_rest;
            parent_rest = p_rest;
            parts.push((offset, s, p, rows));
            offset += count;
        }
        parts
            .into_par_iter()
            .enumerate()
            .for_each(|(b, (offset, start, parent, row_first))| {
                let y0 = b * band_rows;
                let mut r = 0;
                for (i, first) in row_first.iter_mut().enumerate() {
                    *first = r;
                    let base = (y0 + i) * width;
                    let row = &labels[base..base + width];
                    let mut x = 0;
                    while x < width {
                        let l = row[x];
                        start[r] = I::from_usize(base + x);
                        r += 1;
                        x += 1;
                        while x < width && row[x] == l {
                            x += 1;
                        }
                    }
                }
                for (i, p) in parent.iter_mut().enumerate() {
                    *p = I::from_usize(i);
                }
                for i in 1..row_first.len() {
                    let next = row_first.get(i + 1).copied().unwrap_or(r);
                    let (above, here) = (row_first[i - 1]..row_first[i], row_first[i]..next);
                    join_rows(labels, width, y0 + i, start, above, here, parent);
                }
                for p in parent.iter_mut() {
                    *p = I::from_usize(p.get() + offset);
                }
                for first in row_first.iter_mut() {
                    *first += offset;
                }
            });
    }
    start[runs] = I::from_usize(n);
    row_first[height] = runs;
    for y in (band_rows..height).step_by(band_rows) {
        let (above, here) = (
            row_first[y - 1]..row_first[y],
            row_first[y]..row_first[y + 1],
        );
        join_rows(labels, width, y, &start, above, here, &mut parent);
    }

    // Number the regions in raster order. An entry points to a smaller index, whose entry
    // already holds its region's number; a root is the region's first run.
    let label = |r: usize| labels[start[r].get()];
    let mut first: Vec<I> = Vec::new();
    let mut size: Vec<I> = Vec::new();
    for r in 0..runs {
        if label(r) == FIXED {
            continue;
        }
        let q = parent[r].get();
        let id = if q == r {
            first.push(start[r]);
            size.push(I::from_usize(0));
            first.len() - 1
        } else {
            parent[q].get()
        };
        parent[r] = I::from_usize(id);
        size[id] = I::from_usize(size[id].get() + start[r + 1].get() - start[r].get());
    }
    drop(parent);
    drop(start);
    for (f, s) in first.iter().zip(&size) {
        visit(labels[f.get()], s.get(), f.get());
    }
}

/// Runs [`components`] with the narrowest index type that fits.
fn for_each_region(
    labels: &[u16],
    width: usize,
    height: usize,
    visit: impl FnMut(u16, usize, usize),
) {
    let band_rows = label_band_rows(width);
    if labels.len() < u32::MAX as usize {
        components::<u32>(labels, width, height, band_rows, visit)
    } else {
        components::<usize>(labels, width, height, band_rows, visit)
    }
}

/// All 8-connected regions: (label, size in pixels, index of first pixel in raster order), FIXED excluded.
///
/// Regions are listed in raster order of their first pixels. Returns an empty list for an empty
/// image or when `labels.len() != width * height`. Working memory: 8 bytes per run of equal
/// labels along a row (at most 8 bytes per pixel), plus the list.
pub fn regions(labels: &[u16], width: usize, height: usize) -> Vec<(u16, usize, usize)> {
    let mut out = Vec::new();
    if pixel_count(labels.len(), width, height).is_none() {
        return out;
    }
    for_each_region(labels, width, height, |l, s, f| out.push((l, s, f)));
    out
}

/// The pixels (indices in raster order, in fill order) of the 8-connected region of
/// `labels[seed]` that holds `seed`. Empty when `seed` is out of range, is [`FIXED`], or
/// `labels.len() != width * height`.
pub fn region_pixels(labels: &[u16], width: usize, height: usize, seed: usize) -> Vec<usize> {
    if pixel_count(labels.len(), width, height).is_none()
        || seed >= labels.len()
        || labels[seed] == FIXED
    {
        return Vec::new();
    }
    let mut flood = Flood::new(labels.len());
    flood.fill(labels, width, height, seed, usize::MAX);
    flood.pixels
}

// ---------------------------------------------------------------------------------------------
// Merging small regions
// ---------------------------------------------------------------------------------------------

/// Flood-fill state reused across regions: a visited bit per pixel (3 MB for 24 megapixels, so
/// it mostly stays in cache; each fill clears its own bits afterwards), the explicit stack, the
/// region's pixels and its border counts.
struct Flood {
    visited: Vec<u64>,
    stack: Vec<usize>,
    pixels: Vec<usize>,
    /// (neighbouring label, number of 8-neighbour pixel pairs between the region and it).
    borders: Vec<(u16, usize)>,
}

impl Flood {
    fn new(n: usize) -> Self {
        Flood {
            visited: vec![0; n.div_ceil(64)],
            stack: Vec::new(),
            pixels: Vec::new(),
            borders: Vec::new(),
        }
    }

    #[inline]
    fn seen(&self, p: usize) -> bool {
        self.visited[p / 64] >> (p % 64) & 1 != 0
    }

    #[inline]
    fn mark(&mut self, p: usize) {
        self.visited[p / 64] |= 1 << (p % 64);
    }

    /// Fills the current region (pixels of the current label of `seed`, 8-connected) from
    /// `seed`. If it has fewer than `min_area` pixels, returns true with its pixels in
    /// `self.pixels` and its border counts in `self.borders`; as soon as it reaches `min_area`
    /// pixels, stops and returns false. `labels[seed] != FIXED`.
    fn small_region(
        &mut self,
        labels: &[u16],
        width: usize,
        height: usize,
        seed: usize,
        min_area: usize,
    ) -> bool {
        let small = self.fill(labels, width, height, seed, min_area);
        for &p in &self.pixels {
            self.visited[p / 64] = 0;
        }
        small
    }

    /// The fill of [`Flood::small_region`]; every pixel it marks is in `self.pixels`. A
    /// neighbour with the region's label is inside the region and one with another label is
    /// outside, so each border pair (inside, outside) is counted once, when its inside pixel is
    /// taken off the stack.
    fn fill(
        &mut self,
        labels: &[u16],
        width: usize,
        height: usize,
        seed: usize,
        min_area: usize,
    ) -> bool {
        let l = labels[seed];
        let mut nb = [0usize; 8];
        self.stack.clear();
        self.pixels.clear();
        self.borders.clear();
        self.mark(seed);
        self.stack.push(seed);
        self.pixels.push(seed);
        if self.pixels.len() >= min_area {
            return false;
        }
        while let Some(p) = self.stack.pop() {
            let k = neighbours8(p, width, height, &mut nb);
            for &q in &nb[..k] {
                let m = labels[q];
                if m == l {
                    if !self.seen(q) {
                        self.mark(q);
                        self.pixels.push(q);
                        if self.pixels.len() >= min_area {
                            return false;
                        }
                        self.stack.push(q);
                    }
                } else if m != FIXED {
                    match self.borders.iter_mut().find(|(lab, _)| *lab == m) {
                        Some(entry) => entry.1 += 1,
                        None => self.borders.push((m, 1)),
                    }
                }
            }
        }
        true
    }

    /// The neighbouring label with the longest border (ties → the lower label), if any.
    fn best_neighbour(&self) -> Option<u16> {
        self.borders
            .iter()
            .max_by(|a, b| a.1.cmp(&b.1).then(b.0.cmp(&a.0)))
            .map(|&(l, _)| l)
    }
}

/// Merges every 8-connected region (pixels of one label, FIXED excluded) smaller than `min_area`
/// pixels into the neighbouring label it shares the longest border with (border = number of
/// 8-neighbour pixel pairs between the region and pixels of that label; ties → the lower label value).
/// Regions are processed smallest first (ties: first pixel in raster order), sequentially, using the
/// current labels at the time each is processed; passes repeat until no region below min_area
/// can be merged. A small region whose only neighbours are FIXED pixels or the image edge is kept
/// (counted in kept_isolated). min_area <= 1 does nothing. `labels.len() == width*height`.
///
/// Details:
/// - A pass lists the regions of fewer than `min_area` pixels, ordered by (size, first pixel) as
///   they are when the pass starts. Each is then handled in turn as the region that *now*
///   contains its first pixel (earlier merges may have grown it): if that region has reached
///   `min_area` pixels it is left alone; otherwise all of it takes the winning neighbour's label.
/// - One pass always suffices, so `passes` is 1. Regions only grow (a merged region joins the
///   regions of its new label that it touches), and pixels of a region that starts with
///   `min_area` pixels or more are never relabelled. So a region R still below `min_area` after
///   the pass is made of listed regions, all handled; take the one handled last. It cannot have
///   been found large. If it was found isolated, it never changed again, so R is isolated.
///   Otherwise it took a label X and joined the X-regions it touched; each of those is part of
///   R, so was handled earlier, and can only have label X by an earlier merge into X that joined
///   still earlier X-regions, which cannot go on for ever. So every region below `min_area`
///   after one pass is isolated, and a second pass would merge nothing (the tests check this,
///   and compare with the rule applied pass after pass until nothing changes).
/// - When `labels.len() != width * height` nothing is done and the stats are all zero.
///
/// Cost: one run-based labelling (see [`regions`]), a visited bit per pixel, and one flood fill
/// per small region that stops at `min_area` pixels.
pub fn merge_small_regions(
    labels: &mut [u16],
    width: usize,
    height: usize,
    min_area: usize,
) -> MergeStats {
    if min_area <= 1 {
        return MergeStats::default();
    }
    match pixel_count(labels.len(), width, height) {
        Some(0) | None => MergeStats::default(),
        Some(n) if n < u32::MAX as usize => merge_impl::<u32>(labels, width, height, min_area),
        Some(_) => merge_impl::<usize>(labels, width, height, min_area),
    }
}

fn merge_impl<I: PixelIndex>(
    labels: &mut [u16],
    width: usize,
    height: usize,
    min_area: usize,
) -> MergeStats {
    // (size, first pixel) of every region below min_area, smallest first.
    let mut small: Vec<(I, I)> = Vec::new();
    components::<I>(
        labels,
        width,
        height,
        label_band_rows(width),
        |_, size, first| {
            if size < min_area {
                small.push((I::from_usize(size), I::from_usize(first)));
            }
        },
    );
    let mut stats = MergeStats {
        passes: 1,
        ..MergeStats::default()
    };
    if small.is_empty() {
        return stats;
    }
    // Order by (size, first pixel). The list is in raster order of first pixels, so a stable
    // counting sort by size does it in linear time when min_area is not too large.
    if min_area <= small.len() {
        let mut start = vec![0usize; min_area + 1];
        for &(size, _) in &small {
            start[size.get() + 1] += 1;
        }
        for k in 1..start.len() {
            start[k] += start[k - 1];
        }
        let mut sorted = small.clone();
        for &entry in &small {
            let k = &mut start[entry.0.get()];
            sorted[*k] = entry;
            *k += 1;
        }
        small = sorted;
    } else {
        small.sort_unstable();
    }

    let mut flood = Flood::new(labels.len());
    // First pixels of the regions found isolated; one region may be found from several seeds.
    let mut isolated: Vec<usize> = Vec::new();
    for &(_, seed) in &small {
        if !flood.small_region(labels, width, height, seed.get(), min_area) {
            continue;
        }
        match flood.best_neighbour() {
            Some(target) => {
                for &p in &flood.pixels {
                    labels[p] = target;
                }
                stats.merged += 1;
            }
            None => isolated.push(flood.pixels.iter().copied().min().unwrap_or(seed.get())),
        }
    }
    isolated.sort_unstable();
    isolated.dedup();
    stats.kept_isolated = isolated.len();
    stats
}

// ---------------------------------------------------------------------------------------------
// Trapping
// ---------------------------------------------------------------------------------------------

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

/// Integer type for the lower-envelope arithmetic (`i64` or `i128`).
trait EnvelopeInt:
    Copy + PartialOrd + From<i64> + Add<Output = Self> + Sub<Output = Self> + Mul<Output = Self>
{
}
impl EnvelopeInt for i64 {}
impl EnvelopeInt for i128 {}

/// Lower envelope of the parabolas `(x - q)² + g[q]²` of one row (Felzenszwalb & Huttenlocher
/// 2012), in exact integer arithmetic: boundaries are kept as fractions and compared by
/// cross-multiplication.
struct Envelope<T> {
    /// Positions q of the parabolas in the envelope, left to right.
    v: Vec<usize>,
    /// g[q]² + q² for each.
    f: Vec<T>,
    /// The boundary from which parabola k is the lowest: zn[k] / zd[k] (zd[k] > 0; unused for k = 0).
    zn: Vec<T>,
    zd: Vec<T>,
}

impl<T> Default for Envelope<T> {
    fn default() -> Self {
        Envelope {
            v: Vec::new(),
            f: Vec::new(),
            zn: Vec::new(),
            zd: Vec::new(),
        }
    }
}

impl<T: EnvelopeInt> Envelope<T> {
    /// Sets `out[x]` for every `x` whose label `m` has `receives(m)` and whose squared distance
    /// to the nearest pixel of the spreading ink, `min over q of (x - q)² + g[q]²`, is at most
    /// `px2`. `g[q] >= cap` means no pixel of the ink within reach in column q.
    fn spread_row(
        &mut self,
        g: &[u32],
        cap: u32,
        lab: &[u16],
        receives: impl Fn(u16) -> bool,
        px2: T,
        out: &mut [bool],
    ) {
        self.v.clear();
        self.f.clear();
        self.zn.clear();
        self.zd.clear();
        for (q, &gq) in g.iter().enumerate() {
            if gq >= cap {
                continue;
            }
            let qt = T::from(q as i64);
            let gt = T::from(gq as i64);
            let fq = gt * gt + qt * qt;
            loop {
                let Some(k) = self.v.len().checked_sub(1) else {
                    self.v.push(q);
                    self.f.push(fq);
                    self.zn.push(T::from(0));
                    self.zd.push(T::from(1));
                    break;
                };
                // Where parabola q starts to be lower than the last one: num / den.
                let num = fq - self.f[k];
                let den = T::from(2 * (q - self.v[k]) as i64);
                if k > 0 && num * self.zd[k] <= self.zn[k] * den {
                    // The last parabola is nowhere the lowest.
                    self.v.pop();
                    self.f.pop();
                    self.zn.pop();
                    self.zd.pop();
                    continue;
                }
                self.v.push(q);
                self.f.push(fq);
                self.zn.push(num);
                self.zd.push(den);
                break;
            }
        }
        if self.v.is_empty() {
            return;
        }
        let mut k = 0;
        for (x, (&m, o)) in lab.iter().zip(out.iter_mut()).enumerate() {
            if !receives(m) {
                continue;
            }
            let xt = T::from(x as i64);
            while k + 1 < self.v.len() && self.zn[k + 1] < xt * self.zd[k + 1] {
                k += 1;
            }
            let q = self.v[k];
            let dx = T::from(x as i64 - q as i64);
            let gq = T::from(g[q] as i64);
            if dx * dx + gq * gq <= px2 {
                *o = true;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    /// xorshift64* (Vigna 2016): a small seeded generator for the random label images.
    struct XorShift(u64);

    impl XorShift {
        fn new(seed: u64) -> Self {
            XorShift(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1)
        }
        fn next(&mut self) -> u64 {
            self.0 ^= self.0 >> 12;
            self.0 ^= self.0 << 25;
            self.0 ^= self.0 >> 27;
            self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
        }
        fn below(&mut self, n: u64) -> u64 {
            self.next() % n
        }
    }

    /// Random blobs: a coarse grid of random labels, blurred edges from per-pixel noise, some
    /// single-pixel specks, and (if `fixed`) some FIXED pixels.
    fn blobs(seed: u64, w: usize, h: usize, n_labels: u16, fixed: bool) -> Vec<u16> {
        let mut rng = XorShift::new(seed);
        let cell = 1 + rng.below(6) as usize;
        let gw = w / cell + 2;
        let gh = h / cell + 2;
        let grid: Vec<u16> = (0..gw * gh)
            .map(|_| rng.below(n_labels as u64) as u16)
            .collect();
        let mut out = vec![0u16; w * h];
        for y in 0..h {
            for x in 0..w {
                let jx = (x + rng.below(2) as usize) / cell;
                let jy = (y + rng.below(2) as usize) / cell;
                let r = rng.below(100);
                out[y * w + x] = if fixed && r < 6 {
                    FIXED
                } else if r < 14 {
                    rng.below(n_labels as u64) as u16
                } else {
                    grid[jy * gw + jx]
                };
            }
        }
        out
    }

    fn neighbours(p: usize, w: usize, h: usize) -> Vec<usize> {
        let (x, y) = ((p % w) as i64, (p / w) as i64);
        let mut v = Vec::new();
        for dy in -1..=1i64 {
            for dx in -1..=1i64 {
                let (nx, ny) = (x + dx, y + dy);
                if (dx, dy) != (0, 0) && nx >= 0 && ny >= 0 && nx < w as i64 && ny < h as i64 {
                    v.push(ny as usize * w + nx as usize);
                }
            }
        }
        v
    }

    /// Plain breadth-first search: the pixels of the region containing `seed`, sorted.
    fn region_of(labels: &[u16], w: usize, h: usize, seed: usize) -> Vec<usize> {
        let l = labels[seed];
        let mut seen = vec![false; labels.len()];
        let mut queue = std::collections::VecDeque::from([seed]);
        seen[seed] = true;
        let mut out = Vec::new();
        while let Some(p) = queue.pop_front() {
            out.push(p);
            for q in neighbours(p, w, h) {
                if !seen[q] && labels[q] == l {
                    seen[q] = true;
                    queue.push_back(q);
                }
            }
        }
        out.sort_unstable();
        out
    }

    /// Reference regions: (label, size, first pixel) by repeated breadth-first search.
    fn reference_regions(labels: &[u16], w: usize, h: usize) -> Vec<(u16, usize, usize)> {
        let mut done = vec![false; labels.len()];
        let mut out = Vec::new();
        for p in 0..labels.len() {
            if labels[p] == FIXED || done[p] {
                continue;
            }
            let r = region_of(labels, w, h, p);
            for &q in &r {
                done[q] = true;
            }
            out.push((labels[p], r.len(), p));
        }
        out
    }

    /// Border counts of a region: label → number of 8-neighbour pixel pairs.
    fn borders(labels: &[u16], w: usize, h: usize, region: &[usize]) -> BTreeMap<u16, usize> {
        let mut map = BTreeMap::new();
        for &p in region {
            for q in neighbours(p, w, h) {
                if region.binary_search(&q).is_err() && labels[q] != FIXED {
                    *map.entry(labels[q]).or_insert(0) += 1;
                }
            }
        }
        map
    }

    /// The merge rule written out literally, slowly: returns the number of merges.
    fn reference_merge(labels: &mut [u16], w: usize, h: usize, min_area: usize) -> usize {
        if min_area <= 1 {
            return 0;
        }
        let mut merged = 0;
        loop {
            let mut small: Vec<(usize, usize)> = reference_regions(labels, w, h)
                .into_iter()
                .filter(|r| r.1 < min_area)
                .map(|r| (r.1, r.2))
                .collect();
            small.sort();
            let mut merged_now = 0;
            for (_, seed) in small {
                let region = region_of(labels, w, h, seed);
                if region.len() >= min_area {
                    continue;
                }
                let mut best: Option<(u16, usize)> = None;
                for (l, c) in borders(labels, w, h, &region) {
                    if best.is_none_or(|(_, bc)| c > bc) {
                        best = Some((l, c));
                    }
                }
                if let Some((l, _)) = best {
                    for &p in &region {
                        labels[p] = l;
                    }
                    merged_now += 1;
                }
            }
            merged += merged_now;
            if merged_now == 0 {
                return merged;
            }
        }
    }

    fn grid(rows: &[&[u16]]) -> (Vec<u16>, usize, usize) {
        let w = rows[0].len();
        (rows.concat(), w, rows.len())
    }

    // ---- regions -----------------------------------------------------------------------------

    #[test]
    fn regions_use_8_connectivity_and_skip_fixed() {
        let (l, w, h) = grid(&[&[1, 2, 1], &[2, 1, 2], &[1, 2, 1]]);
        assert_eq!(regions(&l, w, h), vec![(1, 5, 0), (2, 4, 1)]);
        let (l, w, h) = grid(&[&[1, 2, 1], &[2, FIXED, 2], &[1, 2, 1]]);
        assert_eq!(
            regions(&l, w, h),
            vec![(1, 1, 0), (2, 4, 1), (1, 1, 2), (1, 1, 6), (1, 1, 8)]
        );
    }

    #[test]
    fn regions_join_branches_that_meet_late() {
        // A U shape and a W shape: branches first seen apart are joined by a later row.
        let (l, w, h) = grid(&[
            &[3, 0, 3, 0, 3, 0, 0],
            &[3, 0, 3, 0, 0, 3, 0],
            &[3, 0, 3, 0, 0, 0, 3],
            &[0, 3, 0, 3, 0, 3, 0],
            &[0, 0, 0, 0, 3, 0, 0],
        ]);
        assert_eq!(regions(&l, w, h), reference_regions(&l, w, h));
        let threes: Vec<_> = regions(&l, w, h).into_iter().filter(|r| r.0 == 3).collect();
        assert_eq!(threes, vec![(3, 13, 0)]);
    }

    #[test]
    fn regions_match_breadth_first_search_on_random_images() {
        for seed in 0..40 {
            let mut rng = XorShift::new(seed + 1000);
            let w = 1 + rng.below(40) as usize;
            let h = 1 + rng.below(30) as usize;
            let l = blobs(seed, w, h, 1 + rng.below(6) as u16, seed % 2 == 0);
            let r = regions(&l, w, h);
            assert_eq!(r, reference_regions(&l, w, h), "seed {seed}");
            let total: usize = r.iter().map(|x| x.1).sum();
            assert_eq!(total, l.iter().filter(|&&x| x != FIXED).count());
        }
    }

    #[test]
    fn labelling_does_not_depend_on_bands() {
        for seed in 0..30 {
            let mut rng = XorShift::new(seed + 3000);
            let w = 1 + rng.below(50) as usize;
            let h = 1 + rng.below(40) as usize;
            let l = blobs(seed + 50, w, h, 1 + rng.below(5) as u16, seed % 3 != 0);
            let want = reference_regions(&l, w, h);
            for band_rows in [1, 2, 3, 7, h] {
                let mut got = Vec::new();
                components::<u32>(&l, w, h, band_rows, |a, b, c| got.push((a, b, c)));
                assert_eq!(got, want, "seed {seed} band_rows {band_rows}");
                let mut got = Vec::new();
                components::<usize>(&l, w, h, band_rows, |a, b, c| got.push((a, b, c)));
                assert_eq!(got, want, "seed {seed} band_rows {band_rows}");
            }
        }
    }

    #[test]
    fn regions_of_degenerate_input() {
        assert!(regions(&[], 0, 0).is_empty());
        assert!(regions(&[], 0, 5).is_empty());
        assert!(regions(&[], 5, 0).is_empty());
        assert!(regions(&[1, 2, 3], 2, 2).is_empty());
        assert!(regions(&[1, 2, 3], usize::MAX, 2).is_empty());
        assert!(regions(&[FIXED; 4], 2, 2).is_empty());
        assert_eq!(regions(&[7], 1, 1), vec![(7, 1, 0)]);
        assert_eq!(
            regions(&[7, 7, 8, 7], 4, 1),
            vec![(7, 2, 0), (8, 1, 2), (7, 1, 3)]
        );
        assert_eq!(
            regions(&[7, 7, 8, 7], 1, 4),
            vec![(7, 2, 0), (8, 1, 2), (7, 1, 3)]
        );
    }

    // ---- merge_small_regions -----------------------------------------------------------------

    #[test]
    fn speck_is_absorbed() {
        let mut l = vec![4u16; 25];
        l[12] = 9;
        let s = merge_small_regions(&mut l, 5, 5, 2);
        assert_eq!(l, vec![4u16; 25]);
        assert_eq!(
            s,
            MergeStats {
                merged: 1,
                kept_isolated: 0,
                passes: 1
            }
        );
    }

    #[test]
    fn small_region_goes_to_longer_border() {
        // The 3-block shares 14 pixel pairs with label 1 and 6 with label 2.
        let (mut l, w, h) = grid(&[
            &[1, 1, 1, 2, 2, 2],
            &[1, 3, 3, 2, 2, 2],
            &[1, 3, 3, 2, 2, 2],
            &[1, 1, 1, 2, 2, 2],
        ]);
        let block = region_of(&l, w, h, 7);
        assert_eq!(borders(&l, w, h, &block), BTreeMap::from([(1, 14), (2, 6)]));
        let s = merge_small_regions(&mut l, w, h, 5);
        let (want, _, _) = grid(&[
            &[1, 1, 1, 2, 2, 2],
            &[1, 1, 1, 2, 2, 2],
            &[1, 1, 1, 2, 2, 2],
            &[1, 1, 1, 2, 2, 2],
        ]);
        assert_eq!(l, want);
        assert_eq!((s.merged, s.kept_isolated), (1, 0));
    }

    #[test]
    fn border_tie_goes_to_lower_label() {
        // The 9-pair shares 7 pixel pairs with label 7 (left) and 7 with label 4 (right).
        let (mut l, w, h) = grid(&[&[7, 7, 4, 4], &[7, 9, 9, 4], &[7, 7, 4, 4]]);
        let pair = region_of(&l, w, h, 5);
        assert_eq!(borders(&l, w, h, &pair), BTreeMap::from([(4, 7), (7, 7)]));
        merge_small_regions(&mut l, w, h, 3);
        let (want, _, _) = grid(&[&[7, 7, 4, 4], &[7, 4, 4, 4], &[7, 7, 4, 4]]);
        assert_eq!(l, want);
    }

    #[test]
    fn regions_are_handled_smallest_first_with_current_labels() {
        let f = FIXED;
        // The single 1 goes first and joins the pair of 2s, which then has 3 pixels.
        let (start, w, h) = grid(&[&[f, f, f, f, f], &[f, 1, 2, 2, f], &[f, f, f, f, f]]);
        let mut l = start.clone();
        let s = merge_small_regions(&mut l, w, h, 3);
        let (want, _, _) = grid(&[&[f, f, f, f, f], &[f, 2, 2, 2, f], &[f, f, f, f, f]]);
        assert_eq!(l, want);
        assert_eq!(
            s,
            MergeStats {
                merged: 1,
                kept_isolated: 0,
                passes: 1
            }
        );
        // With min_area 4 the grown region (3 pixels) has nowhere to go: kept.
        let mut l = start.clone();
        let s = merge_small_regions(&mut l, w, h, 4);
        assert_eq!(l, want);
        assert_eq!((s.merged, s.kept_isolated), (1, 1));
        // Equal sizes: the first pixel in raster order goes first.
        let (mut l, w, h) = grid(&[
            &[f, f, f, f, f, f],
            &[f, 5, 5, 6, 6, f],
            &[f, f, f, f, f, f],
        ]);
        merge_small_regions(&mut l, w, h, 3);
        assert_eq!(&l[7..11], &[6, 6, 6, 6]);
    }

    #[test]
    fn region_enclosed_by_fixed_is_kept_and_counted() {
        let f = FIXED;
        let (start, w, h) = grid(&[
            &[1, 1, 1, 1, 1, 1],
            &[1, f, f, f, f, 1],
            &[1, f, 3, 3, f, 1],
            &[1, f, f, f, f, 1],
            &[1, 1, 1, 1, 1, 1],
        ]);
        let mut l = start.clone();
        let s = merge_small_regions(&mut l, w, h, 5);
        assert_eq!(l, start);
        assert_eq!(
            s,
            MergeStats {
                merged: 0,
                kept_isolated: 1,
                passes: 1
            }
        );
        // A whole image smaller than min_area has only the edge around it.
        let mut l = vec![5u16, 5];
        let s = merge_small_regions(&mut l, 2, 1, 3);
        assert_eq!(l, vec![5, 5]);
        assert_eq!((s.merged, s.kept_isolated), (0, 1));
        // Regions touching only FIXED pixels and the image edge.
        let (start, w, h) = grid(&[&[2, f, 3], &[f, f, f], &[4, f, 4]]);
        let mut l = start.clone();
        let s = merge_small_regions(&mut l, w, h, 2);
        assert_eq!(l, start);
        assert_eq!((s.merged, s.kept_isolated), (0, 4));
    }

    #[test]
    fn min_area_one_or_less_and_degenerate_input_do_nothing() {
        let start = blobs(3, 9, 7, 4, true);
        for min_area in [0, 1] {
            let mut l = start.clone();
            assert_eq!(
                merge_small_regions(&mut l, 9, 7, min_area),
                MergeStats::default()
            );
            assert_eq!(l, start);
        }
        assert_eq!(
            merge_small_regions(&mut [], 0, 0, 50),
            MergeStats::default()
        );
        assert_eq!(
            merge_small_regions(&mut [], 0, 9, 50),
            MergeStats::default()
        );
        assert_eq!(
            merge_small_regions(&mut [], 9, 0, 50),
            MergeStats::default()
        );
        let mut l = vec![1u16, 2, 3];
        assert_eq!(merge_small_regions(&mut l, 2, 2, 50), MergeStats::default());
        assert_eq!(
            merge_small_regions(&mut l, usize::MAX, 3, 50),
            MergeStats::default()
        );
        assert_eq!(l, vec![1, 2, 3]);
        let mut l = vec![FIXED; 6];
        let s = merge_small_regions(&mut l, 3, 2, usize::MAX);
        assert_eq!((s.merged, s.kept_isolated), (0, 0));
        // A min_area larger than the image: everything ends in one label.
        let mut l = blobs(5, 13, 11, 5, false);
        let s = merge_small_regions(&mut l, 13, 11, usize::MAX);
        assert!(l.iter().all(|&x| x == l[0]));
        assert_eq!(s.kept_isolated, 1);
    }

    #[test]
    fn merge_properties_on_random_images() {
        let sizes = [
            (1, 1),
            (1, 17),
            (23, 1),
            (2, 2),
            (7, 5),
            (31, 19),
            (40, 40),
            (64, 33),
        ];
        let mut case = 0u64;
        for &(w, h) in &sizes {
            for seed in 0..6u64 {
                for &min_area in &[2usize, 3, 5, 12, 50] {
                    case += 1;
                    let n_labels = 2 + (seed % 6) as u16;
                    let start = blobs(case * 7 + seed, w, h, n_labels, seed % 3 != 0);
                    let mut l = start.clone();
                    let s = merge_small_regions(&mut l, w, h, min_area);
                    let what = format!("{w}x{h} seed {seed} min_area {min_area}");

                    // FIXED pixels unchanged, and nothing else becomes FIXED.
                    for (a, b) in start.iter().zip(&l) {
                        assert_eq!(*a == FIXED, *b == FIXED, "{what}");
                    }
                    // No region below min_area except the kept ones, which touch no label.
                    let small: Vec<_> = regions(&l, w, h)
                        .into_iter()
                        .filter(|r| r.1 < min_area)
                        .collect();
                    assert_eq!(small.len(), s.kept_isolated, "{what}");
                    for r in &small {
                        let region = region_of(&l, w, h, r.2);
                        assert!(borders(&l, w, h, &region).is_empty(), "{what}");
                    }
                    // The rule written out literally gives the same labels and merge count.
                    let mut reference = start.clone();
                    let merged = reference_merge(&mut reference, w, h, min_area);
                    assert_eq!(l, reference, "{what}");
                    assert_eq!(s.merged, merged, "{what}");
                    assert!(s.passes >= 1, "{what}");
                    // A second run has nothing left to do.
                    let mut again = l.clone();
                    let s2 = merge_small_regions(&mut again, w, h, min_area);
                    assert_eq!(again, l, "{what}");
                    assert_eq!(
                        (s2.merged, s2.kept_isolated),
                        (0, s.kept_isolated),
                        "{what}"
                    );
                }
            }
        }
    }

    #[test]
    fn merge_handles_large_regions_without_recursion() {
        // One 600×500 region with specks; flood fills are bounded by min_area, and the
        // labelling is iterative, so nothing here depends on the stack size.
        let (w, h) = (600, 500);
        let mut l = vec![2u16; w * h];
        for p in (0..w * h).step_by(997) {
            l[p] = 5;
        }
        let s = merge_small_regions(&mut l, w, h, 50);
        assert!(l.iter().all(|&x| x == 2));
        assert_eq!(s.merged, (w * h).div_ceil(997));
        // min_area above the image size: the fill walks the whole image.
        let mut l = vec![2u16; w * h];
        l[w * h / 2] = 5;
        let s = merge_small_regions(&mut l, w, h, w * h + 1);
        assert!(l.iter().all(|&x| x == 2));
        assert_eq!((s.merged, s.kept_isolated), (1, 1));
    }

    // ---- trap --------------------------------------------------------------------------------

    const ENVELOPE: Method = Method::Envelope { wide: false };
    const METHODS: [Method; 4] = [
        Method::Auto,
        Method::Bits,
        Method::Envelope { wide: false },
        Method::Envelope { wide: true },
    ];

    /// Trap rule by direct search of the (2px + 1)² window around every pixel.
    fn reference_trap(
        labels: &[u16],
        w: usize,
        h: usize,
        lightness: &[f64],
        is_ink: &[bool],
        px: u32,
    ) -> Vec<Vec<bool>> {
        let nl = is_ink.len();
        let ink = |l: usize| l < nl && is_ink[l] && l != FIXED as usize;
        let lum = |l: usize| lightness.get(l).copied().unwrap_or(f64::NAN);
        let r = px as i64;
        (0..nl)
            .map(|l| {
                (0..labels.len())
                    .map(|p| {
                        let m = labels[p] as usize;
                        if m == l {
                            return ink(l);
                        }
                        if !(ink(l) && ink(m) && lum(m) < lum(l)) {
                            return false;
                        }
                        let (x, y) = ((p % w) as i64, (p / w) as i64);
                        for dy in -r..=r {
                            for dx in -r..=r {
                                let (nx, ny) = (x + dx, y + dy);
                                if dx * dx + dy * dy <= r * r
                                    && nx >= 0
                                    && ny >= 0
                                    && nx < w as i64
                                    && ny < h as i64
                                    && labels[ny as usize * w + nx as usize] as usize == l
                                {
                                    return true;
                                }
                            }
                        }
                        false
                    })
                    .collect()
            })
            .collect()
    }

    fn own_masks(labels: &[u16], is_ink: &[bool]) -> Vec<Vec<bool>> {
        (0..is_ink.len())
            .map(|l| {
                labels
                    .iter()
                    .map(|&m| m as usize == l && is_ink[l] && m != FIXED)
                    .collect()
            })
            .collect()
    }

    fn mask_of(rows: &[&str]) -> Vec<bool> {
        rows.iter()
            .flat_map(|r| r.chars().map(|c| c == '#'))
            .collect()
    }

    /// A random trap problem: labels, lightness (with ties and a NaN), is_ink.
    fn trap_case(seed: u64) -> (Vec<u16>, usize, usize, Vec<f64>, Vec<bool>) {
        let mut rng = XorShift::new(seed + 77);
        let w = 1 + rng.below(30) as usize;
        let h = 1 + rng.below(24) as usize;
        let nl = 1 + rng.below(7) as usize;
        let labels = blobs(seed, w, h, nl as u16 + 1, seed % 2 == 1);
        let levels = [15.0, 40.0, 40.0, 62.5, 90.0, f64::NAN];
        let lightness: Vec<f64> = (0..nl - (seed % 3 == 0) as usize)
            .map(|_| levels[rng.below(levels.len() as u64) as usize])
            .collect();
        let is_ink: Vec<bool> = (0..nl).map(|_| rng.below(5) != 0).collect();
        (labels, w, h, lightness, is_ink)
    }

    #[test]
    fn px_zero_gives_exclusive_own_pixels() {
        for seed in 0..30 {
            let (labels, w, h, lightness, is_ink) = trap_case(seed);
            let masks = trap(&labels, w, h, &lightness, &is_ink, 0);
            assert_eq!(masks, own_masks(&labels, &is_ink), "seed {seed}");
            for p in 0..labels.len() {
                let count = masks.iter().filter(|m| m[p]).count();
                let l = labels[p] as usize;
                let expected = usize::from(l < is_ink.len() && is_ink[l]);
                assert_eq!(count, expected, "seed {seed} pixel {p}");
            }
        }
    }

    #[test]
    fn light_pixel_in_dark_field_spreads_as_a_disc() {
        let mut labels = vec![1u16; 25];
        labels[12] = 0;
        let light = [90.0, 20.0];
        let ink = [true, true];
        let m = trap(&labels, 5, 5, &light, &ink, 1);
        assert_eq!(
            m[0],
            mask_of(&[".....", "..#..", ".###.", "..#..", "....."])
        );
        assert_eq!(m[1], labels.iter().map(|&l| l == 1).collect::<Vec<_>>());
        let m = trap(&labels, 5, 5, &light, &ink, 2);
        assert_eq!(
            m[0],
            mask_of(&["..#..", ".###.", "#####", ".###.", "..#.."])
        );
        // (±2, ±2) is √8 ≤ 3 away; (±3, ±1) is √10 > 3 away.
        let mut labels = vec![1u16; 49];
        labels[24] = 0;
        let m = trap(&labels, 7, 7, &light, &ink, 3);
        assert_eq!(
            m[0],
            mask_of(&[
                "...#...", ".#####.", ".#####.", "#######", ".#####.", ".#####.", "...#...",
            ])
        );
        assert_eq!(m[0].iter().filter(|&&b| b).count(), 29);
        // The dark ink never spreads into the lighter one.
        assert!(!m[1][24]);
    }

    #[test]
    fn lighter_ink_spreads_under_darker_only() {
        let (labels, w, h) = grid(&[&[0, 0, 0, 1, 1, 1], &[0, 0, 0, 1, 1, 1]]);
        let m = trap(&labels, w, h, &[80.0, 30.0], &[true, true], 2);
        assert_eq!(m[0], mask_of(&["#####.", "#####."]));
        assert_eq!(m[1], mask_of(&["...###", "...###"]));
        // Swap the lightness: now ink 1 spreads.
        let m = trap(&labels, w, h, &[30.0, 80.0], &[true, true], 2);
        assert_eq!(m[0], mask_of(&["###...", "###..."]));
        assert_eq!(m[1], mask_of(&[".#####", ".#####"]));
    }

    #[test]
    fn equal_lightness_neither_spreads() {
        let (labels, w, h) = grid(&[&[0, 0, 1, 1], &[0, 0, 1, 1]]);
        let m = trap(&labels, w, h, &[50.0, 50.0], &[true, true], 3);
        assert_eq!(m, own_masks(&labels, &[true, true]));
        // NaN or missing lightness: no spread either way.
        let m = trap(&labels, w, h, &[f64::NAN, 10.0], &[true, true], 3);
        assert_eq!(m, own_masks(&labels, &[true, true]));
        let m = trap(&labels, w, h, &[90.0], &[true, true], 3);
        assert_eq!(m, own_masks(&labels, &[true, true]));
    }

    #[test]
    fn substrate_and_fixed_neither_spread_nor_receive() {
        // 0 = light ink, 1 = dark ink, 2 = substrate (darkest, but not an ink).
        let labels = [0u16, 0, 2, 1, 1, 1, 1];
        let m = trap(&labels, 7, 1, &[90.0, 30.0, 5.0], &[true, true, false], 2);
        // The spread reaches across the substrate by straight-line distance, never onto it.
        assert_eq!(m[0], mask_of(&["##.#..."]));
        assert_eq!(m[1], mask_of(&["...####"]));
        assert_eq!(m[2], vec![false; 7]);
        // A substrate lighter than every ink does not spread either.
        let labels = [2u16, 2, 1, 1];
        let m = trap(&labels, 4, 1, &[90.0, 30.0, 100.0], &[true, true, false], 2);
        assert_eq!(m, own_masks(&labels, &[true, true, false]));
        // FIXED pixels never receive.
        let labels = [0u16, FIXED, 1, FIXED];
        let m = trap(&labels, 2, 2, &[90.0, 30.0], &[true, true], 5);
        assert_eq!(m[0], vec![true, false, true, false]);
        // FIXED is never an ink, even with an is_ink entry for it.
        let mut ink = vec![true; FIXED as usize + 1];
        ink[2] = false;
        let mut light = vec![50.0; FIXED as usize + 1];
        light[FIXED as usize] = 99.0;
        let m = trap(&labels, 2, 2, &light, &ink, 5);
        assert_eq!(m.len(), FIXED as usize + 1);
        assert!(m[FIXED as usize].iter().all(|&b| !b));
        // More is_ink entries than there are labels: the extra masks stay empty.
        let ink = vec![true; 70_000];
        let light: Vec<f64> = (0..70_000).map(|l| l as f64).collect();
        let m = trap(&labels, 2, 2, &light, &ink, 5);
        assert_eq!(m.len(), 70_000);
        assert_eq!(m[1], vec![true, false, true, false]);
        assert!(m[FIXED as usize..]
            .iter()
            .all(|mask| mask.iter().all(|&b| !b)));
    }

    #[test]
    fn trap_matches_window_search_on_random_images() {
        for seed in 0..60 {
            let (labels, w, h, lightness, is_ink) = trap_case(seed);
            for px in [1u32, 2, 3, 5] {
                let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
                let got = trap(&labels, w, h, &lightness, &is_ink, px);
                assert_eq!(got, want, "seed {seed} px {px} ({w}x{h})");
            }
        }
    }

    #[test]
    fn trap_is_exact_by_brute_force_distances() {
        for seed in 100..140 {
            let (labels, w, h, lightness, is_ink) = trap_case(seed);
            let n = labels.len();
            let lum = |l: usize| lightness.get(l).copied().unwrap_or(f64::NAN);
            let ink = |l: usize| l < is_ink.len() && is_ink[l];
            for px in [1u32, 2, 4] {
                let masks = trap(&labels, w, h, &lightness, &is_ink, px);
                for (l, mask) in masks.iter().enumerate() {
                    let pixels_of_l: Vec<usize> =
                        (0..n).filter(|&q| labels[q] as usize == l).collect();
                    // Squared distance from p to the nearest pixel of l, over all pixels.
                    let nearest = |p: usize| {
                        let (x, y) = ((p % w) as i64, (p / w) as i64);
                        pixels_of_l
                            .iter()
                            .map(|&q| {
                                let (qx, qy) = ((q % w) as i64, (q / w) as i64);
                                (x - qx).pow(2) + (y - qy).pow(2)
                            })
                            .min()
                    };
                    for p in 0..n {
                        let m = labels[p] as usize;
                        if m == l {
                            assert_eq!(mask[p], ink(l), "own pixel, seed {seed}");
                            continue;
                        }
                        let within = nearest(p).is_some_and(|d| d <= (px * px) as i64);
                        let darker_ink = labels[p] != FIXED && ink(m) && lum(m) < lum(l);
                        if mask[p] {
                            // (a) a darker ink's pixel, (b) within px of a pixel of l.
                            assert!(darker_ink && ink(l), "seed {seed} px {px} l {l} p {p}");
                            assert!(within, "seed {seed} px {px} l {l} p {p}");
                        } else {
                            // (c) nothing within reach is missed.
                            assert!(
                                !(ink(l) && darker_ink && within),
                                "seed {seed} px {px} l {l} p {p}"
                            );
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn trap_bands_and_wide_arithmetic_agree() {
        for seed in 200..230 {
            let (labels, w, h, lightness, is_ink) = trap_case(seed);
            for px in [1u32, 2, 3, 7, 33] {
                let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
                for rows in [None, Some(1), Some(2), Some(3), Some(5), Some(8)] {
                    for method in METHODS {
                        let got = trap_impl(&labels, w, h, &lightness, &is_ink, px, rows, method);
                        assert_eq!(got, want, "seed {seed} px {px} rows {rows:?} {method:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn packing_and_row_dilation() {
        let mut rng = XorShift::new(5);
        for len in [0usize, 1, 7, 8, 63, 64, 65, 127, 128, 129, 200] {
            let src: Vec<u16> = (0..len).map(|_| rng.below(3) as u16).collect();
            let words = len.div_ceil(64) + 1;
            let mut dst = vec![u64::MAX; words];
            let any = pack_with(&src, &mut dst, |v| v == 1);
            let bit = |d: &[u64], i: usize| d[i / 64] >> (i % 64) & 1 == 1;
            for i in 0..words * 64 {
                assert_eq!(bit(&dst, i), src.get(i) == Some(&1), "len {len} bit {i}");
            }
            assert_eq!(any, src.contains(&1));
            let mut wider = vec![0u64; words];
            dilate_row(&dst, &mut wider);
            for i in 0..len {
                let near = (i.saturating_sub(1)..=(i + 1).min(len - 1)).any(|j| src[j] == 1);
                assert_eq!(bit(&wider, i), near, "len {len} bit {i}");
            }
        }
    }

    #[test]
    fn trap_on_rows_of_several_words_matches_window_search() {
        for (k, &w) in [63usize, 64, 65, 128, 129, 200].iter().enumerate() {
            let h = 9 + k;
            let labels = blobs(400 + k as u64, w, h, 5, k % 2 == 0);
            let lightness = [80.0, 20.0, 50.0, 50.0, 95.0];
            let is_ink = [true, true, true, true, false];
            for px in [1u32, 2, 4, 6] {
                let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
                for rows in [None, Some(1), Some(4)] {
                    for method in METHODS {
                        let got = trap_impl(&labels, w, h, &lightness, &is_ink, px, rows, method);
                        assert_eq!(got, want, "w {w} px {px} rows {rows:?} {method:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn trap_with_many_inks_matches_window_search() {
        // More than FEW_INKS inks: the bands first look for the labels near them.
        for seed in 0..6u64 {
            let mut rng = XorShift::new(seed + 900);
            let (w, h) = (20 + rng.below(50) as usize, 10 + rng.below(30) as usize);
            let nl = FEW_INKS + 2 + rng.below(30) as usize;
            let labels = blobs(seed + 901, w, h, nl as u16 + 3, true);
            let lightness: Vec<f64> = (0..nl).map(|_| rng.below(12) as f64 * 8.0).collect();
            let is_ink: Vec<bool> = (0..nl).map(|_| rng.below(6) != 0).collect();
            for px in [1u32, 3, 40] {
                let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
                for rows in [None, Some(3)] {
                    for method in METHODS {
                        let got = trap_impl(&labels, w, h, &lightness, &is_ink, px, rows, method);
                        assert_eq!(got, want, "seed {seed} px {px} rows {rows:?} {method:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn trap_with_huge_px_covers_every_darker_pixel() {
        let (labels, w, h, lightness, is_ink) = trap_case(9);
        let diagonal = ((w * w + h * h) as f64).sqrt().ceil() as u32;
        let want = reference_trap(&labels, w, h, &lightness, &is_ink, diagonal);
        assert_eq!(trap(&labels, w, h, &lightness, &is_ink, u32::MAX), want);
        assert_eq!(trap(&labels, w, h, &lightness, &is_ink, diagonal), want);
    }

    #[test]
    fn trap_of_degenerate_input() {
        let light = [90.0, 20.0];
        let ink = [true, true];
        assert_eq!(
            trap(&[], 0, 0, &light, &ink, 3),
            vec![Vec::<bool>::new(); 2]
        );
        assert_eq!(
            trap(&[], 0, 7, &light, &ink, 3),
            vec![Vec::<bool>::new(); 2]
        );
        assert!(trap(&[0, 1], 2, 1, &light, &[], 3).is_empty());
        // Length not width × height: own pixels only.
        let labels = [0u16, 1, 1, 0, 1];
        let m = trap(&labels, 2, 2, &light, &ink, 3);
        assert_eq!(m, own_masks(&labels, &ink));
        let m = trap(&labels, usize::MAX, 2, &light, &ink, 3);
        assert_eq!(m, own_masks(&labels, &ink));
        // Labels beyond is_ink are not inks.
        let labels = [0u16, 5, 5, 1];
        let m = trap(&labels, 4, 1, &light, &ink, 3);
        assert_eq!(m[0], vec![true, false, false, true]);
        assert_eq!(m[1], vec![false, false, false, true]);
        // Single pixel and single row or column.
        assert_eq!(
            trap(&[1], 1, 1, &light, &ink, 4),
            vec![vec![false], vec![true]]
        );
        let m = trap(&[0, 1, 1, 1, 1, 1], 1, 6, &light, &ink, 4);
        assert_eq!(m[0], vec![true, true, true, true, true, false]);
    }

    #[test]
    fn results_do_not_depend_on_thread_count() {
        let (w, h) = (301, 257);
        let labels = blobs(42, w, h, 6, true);
        let light = [95.0, 70.0, 55.0, 55.0, 30.0, 10.0];
        let ink = [true, true, true, true, false, true];
        let run = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| {
                let mut l = labels.clone();
                let s = merge_small_regions(&mut l, w, h, 20);
                let bits = trap_impl(&l, w, h, &light, &ink, 3, Some(4), Method::Bits);
                let envelope = trap_impl(&l, w, h, &light, &ink, 3, Some(4), ENVELOPE);
                assert_eq!(bits, envelope);
                (l, s, bits)
            })
        };
        let one = run(1);
        assert_eq!(one, run(2));
        assert_eq!(one, run(3));
        assert_eq!(one.2, reference_trap(&one.0, w, h, &light, &ink, 3));
    }
}
