//! Connected regions of a label image, and flood fills over them.
//!
//! A label image is `width × height` labels (`u16`) in raster order: row by row, top row first,
//! so pixel `(x, y)` is at index `y * width + x`. Connectivity is 8-neighbour throughout. Pixels
//! labelled [`FIXED`] take no part. Every size and area here is in pixels.
//!
//! Nothing here recurses. Regions are found by run-based union-find labelling (bands of rows in
//! parallel), and flood fills use an explicit stack. Every result depends on the input alone,
//! not on the thread count.

use rayon::prelude::*;

/// Label of a pixel that is fixed: never changed, never merged into, never trapped (e.g. transparent).
pub const FIXED: u16 = u16::MAX;

/// `Some(width * height)` when the label slice has exactly that many pixels.
pub(crate) fn pixel_count(len: usize, width: usize, height: usize) -> Option<usize> {
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
pub(crate) trait PixelIndex: Copy + Ord + Send + Sync {
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
pub(crate) fn label_band_rows(width: usize) -> usize {
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
pub(crate) fn components<I: PixelIndex>(
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
    flood.small_region(labels, width, height, seed, usize::MAX);
    flood.pixels
}

// ---------------------------------------------------------------------------------------------
// Flood fills
// ---------------------------------------------------------------------------------------------

/// Flood-fill state reused across regions: a visited bit per pixel (3 MB for 24 megapixels, so
/// it mostly stays in cache; each fill clears its own bits afterwards), the explicit stack, the
/// region's pixels and its border counts.
pub(crate) struct Flood {
    visited: Vec<u64>,
    stack: Vec<usize>,
    pub(crate) pixels: Vec<usize>,
    /// (neighbouring label, number of 8-neighbour pixel pairs between the region and it).
    borders: Vec<(u16, usize)>,
}

impl Flood {
    pub(crate) fn new(n: usize) -> Self {
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
    pub(crate) fn small_region(
        &mut self,
        labels: &[u16],
        width: usize,
        height: usize,
        seed: usize,
        min_area: usize,
    ) -> bool {
        // A neighbour with the region's label is inside the region and one with another
        // label is outside, so each border pair (inside, outside) is counted once, when its
        // inside pixel is taken off the stack. Every pixel marked is in `self.pixels`.
        let small = 'fill: {
            let l = labels[seed];
            let mut nb = [0usize; 8];
            self.stack.clear();
            self.pixels.clear();
            self.borders.clear();
            self.mark(seed);
            self.stack.push(seed);
            self.pixels.push(seed);
            if self.pixels.len() >= min_area {
                break 'fill false;
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
                                break 'fill false;
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
        };
        for &p in &self.pixels {
            self.visited[p / 64] = 0;
        }
        small
    }

    /// The neighbouring label with the longest border (ties → the lower label), if any.
    pub(crate) fn best_neighbour(&self) -> Option<u16> {
        self.borders
            .iter()
            .max_by(|a, b| a.1.cmp(&b.1).then(b.0.cmp(&a.0)))
            .map(|&(l, _)| l)
    }
}

#[cfg(test)]
#[path = "components_testing.rs"]
pub(crate) mod testing;

#[cfg(test)]
#[path = "components_tests.rs"]
mod tests;
