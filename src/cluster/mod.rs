//! One clustering engine over plain weighted rows: k-means++ seeding, hard Lloyd
//! iterations (optionally with Hamerly distance bounds), soft k-means, and Gaussian mixtures
//! with a full covariance per component (EM started from k-means).
//!
//! The engine knows nothing about images or colour: it sees `n × d` f32 rows and
//! a weight per row. Weighted rows are exact stand-ins for repeated rows, so a
//! histogram of distinct values gives the same optimisation as every pixel.
//!
//! Determinism: work is split into fixed-size chunks whatever the thread count,
//! and per-chunk partial sums are reduced in chunk order.

mod anneal;
mod engine;
mod choose;
mod hard;
mod init;
mod mixture;
mod model;
mod params;
mod refine;
mod soft;
mod split_merge;

pub use anneal::{anneal, Anneal, AnnealResult};
pub use engine::EngineOptions;
pub use choose::{
    adjusted_rand_index, bic, calibration, k_path, silhouette, stability, weighted_sample,
    CalibrationBin,
};
pub use hard::{assign_nearest, lloyd, lloyd_fixed, LloydResult, Stop};
pub use init::{kmeans_plus_plus, kmeans_plus_plus_from};
pub use mixture::{fit_mixture, free_parameters, Mixture, MixtureSettings};
pub use model::{finish, fit, fit_from, fit_hard, stop_rule, KMeansModel};
pub use params::{Beta, KMeansParams, Mode, ValidParams, MAX_K};
pub use refine::{
    refine_means, Refine, Refined, DEFAULT_RANDOM_SWAP_TRIALS, DEFAULT_SPLIT_MERGE_MOVES,
    DEFAULT_SWAP_TRIALS, MAX_REFINE,
};
pub use soft::{
    auto_beta, responsibility_matrix, soft_assign, soft_kmeans, soft_kmeans_fixed, SoftAssignment,
    SoftResult,
};
pub use split_merge::{split_merge, SplitMerge};

use crate::error::ParamsError;

/// Rows per parallel work item. Fixed, so sums never depend on the thread count.
pub(crate) const CHUNK: usize = 2048;

/// Weighted rows: `rows.len() / dim` points of `dim` f32 features each.
#[derive(Debug, Clone, Copy)]
pub struct Dataset<'a> {
    rows: &'a [f32],
    dim: usize,
    weights: Option<&'a [f64]>,
}

impl<'a> Dataset<'a> {
    /// Checks shape, finiteness and weights.
    pub fn new(
        rows: &'a [f32],
        dim: usize,
        weights: Option<&'a [f64]>,
    ) -> Result<Self, ParamsError> {
        if dim == 0 {
            return Err(ParamsError::ZeroDimension);
        }
        if rows.len() % dim != 0 {
            return Err(ParamsError::RaggedRows {
                got: rows.len(),
                dim,
            });
        }
        let n = rows.len() / dim;
        if let Some(pos) = rows.iter().position(|v| !v.is_finite()) {
            return Err(ParamsError::NonFinite {
                what: "feature",
                row: pos / dim,
            });
        }
        if let Some(w) = weights {
            if w.len() != n {
                return Err(ParamsError::WeightCount {
                    rows: n,
                    weights: w.len(),
                });
            }
            if let Some(i) = w.iter().position(|x| !(x.is_finite() && *x >= 0.0)) {
                return Err(ParamsError::BadWeight(i));
            }
        }
        Ok(Dataset { rows, dim, weights })
    }

    /// From an `n × d` ndarray view (must be in standard row-major layout).
    pub fn from_array(
        view: &'a ndarray::ArrayView2<'a, f32>,
        weights: Option<&'a [f64]>,
    ) -> Result<Self, ParamsError> {
        let dim = view.ncols();
        let rows = view.as_slice().ok_or_else(|| {
            ParamsError::Other("the array must be contiguous and row-major".into())
        })?;
        Dataset::new(rows, dim, weights)
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.rows.len() / self.dim
    }
    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }
    /// Features per row.
    pub fn dim(&self) -> usize {
        self.dim
    }
    /// Row `i`.
    #[inline]
    pub fn row(&self, i: usize) -> &'a [f32] {
        &self.rows[i * self.dim..(i + 1) * self.dim]
    }
    /// All rows, flat.
    pub fn rows(&self) -> &'a [f32] {
        self.rows
    }
    /// Weight of row `i` (1 when unweighted).
    #[inline]
    pub fn weight(&self, i: usize) -> f64 {
        self.weights.map_or(1.0, |w| w[i])
    }
    /// Sum of weights.
    pub fn total_weight(&self) -> f64 {
        self.weights.map_or(self.len() as f64, |w| w.iter().sum())
    }
}

/// Squared Euclidean distance (summed left to right, whatever the dimension).
#[inline(always)]
pub(crate) fn dist2(a: &[f32], b: &[f32]) -> f32 {
    let mut s = 0.0f32;
    for (x, y) in a.iter().zip(b) {
        let d = x - y;
        s += d * d;
    }
    s
}

#[inline(always)]
fn nearest_two_fixed<const D: usize>(x: &[f32], means: &[f32]) -> (usize, f32, f32) {
    let x: &[f32; D] = x.try_into().expect("row of D values");
    let mut best = 0usize;
    let mut d1 = f32::INFINITY;
    let mut d2 = f32::INFINITY;
    for (j, m) in means.chunks_exact(D).enumerate() {
        let mut d = 0.0f32;
        for t in 0..D {
            let v = x[t] - m[t];
            d += v * v;
        }
        if d < d1 {
            d2 = d1;
            d1 = d;
            best = j;
        } else if d < d2 {
            d2 = d;
        }
    }
    (best, d1, d2)
}

/// Means per vector block in [`MeansByDim`].
const LANES: usize = 8;

/// Means laid out by dimension (every mean's first coordinate, then every second, …),
/// each run padded with +∞ to a multiple of [`LANES`], so the distances from one row to
/// a block of means are computed side by side (the compiler vectorises the block). Each
/// distance is still summed over dimensions in order, so it is bit-identical to
/// [`dist2`], and [`nearest_two_by_dim`] gives exactly what [`nearest_two`] gives.
#[derive(Debug, Clone)]
pub(crate) struct MeansByDim {
    v: Vec<f32>,
    kpad: usize,
    dim: usize,
}

impl MeansByDim {
    /// From `k × dim` means, row after row.
    pub(crate) fn new(means: &[f32], dim: usize) -> Self {
        let k = means.len() / dim;
        let kpad = k.div_ceil(LANES).max(1) * LANES;
        let mut v = vec![f32::INFINITY; kpad * dim];
        for (j, m) in means.chunks_exact(dim).enumerate() {
            for (t, &x) in m.iter().enumerate() {
                v[t * kpad + j] = x;
            }
        }
        MeansByDim { v, kpad, dim }
    }
}

#[cfg(not(target_arch = "x86_64"))]
#[inline(always)]
fn scan_block(d: &[f32; LANES], j0: usize, best: &mut usize, d1: &mut f32, d2: &mut f32) {
    for (l, &dl) in d.iter().enumerate() {
        // Same decisions as `if dl < d1 {…} else if dl < d2 {…}`, as d1 ≤ d2 always.
        if dl < *d2 {
            if dl < *d1 {
                *d2 = *d1;
                *d1 = dl;
                *best = j0 + l;
            } else {
                *d2 = dl;
            }
        }
    }
}

/// Distances from `x` to every block of means, scanned in index order. Inlined into the
/// fixed-dimension callers, where `x.len()` is a constant and the loops unroll.
///
/// On x86-64 the scan runs four means at a time in SSE2 registers (part of every x86-64
/// processor): each lane keeps the smallest and second-smallest distance it has seen and
/// where the smallest was (the earliest on ties), and the four lanes are merged at the
/// end. Minimum and maximum are exact, and the distances are summed in the same order,
/// so the result is the same index and distances as the scalar scan.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
fn nearest_two_blocks(x: &[f32], m: &MeansByDim) -> (usize, f32, f32) {
    use std::arch::x86_64::*;
    // Checked in every build: the loads below rely on it (one predictable branch a call).
    assert!(
        m.kpad % 4 == 0 && m.v.len() >= m.kpad * x.len(),
        "row and means disagree"
    );
    // SAFETY: SSE2 is part of the x86-64 baseline; every load reads 4 floats at
    // t·kpad + q with t < x.len() and q + 4 ≤ kpad, inside `m.v` (asserted above).
    unsafe {
        let inf = _mm_set1_ps(f32::INFINITY);
        let (mut first, mut second) = (inf, inf);
        let mut at = _mm_setr_epi32(0, 1, 2, 3);
        let mut idx = at;
        let four = _mm_set1_epi32(4);
        let base = m.v.as_ptr();
        for q in (0..m.kpad).step_by(4) {
            let mut d = _mm_setzero_ps();
            for (t, &xt) in x.iter().enumerate() {
                let v = _mm_sub_ps(_mm_set1_ps(xt), _mm_loadu_ps(base.add(t * m.kpad + q)));
                d = _mm_add_ps(d, _mm_mul_ps(v, v));
            }
            let lt = _mm_castps_si128(_mm_cmplt_ps(d, first));
            second = _mm_min_ps(second, _mm_max_ps(d, first));
            first = _mm_min_ps(first, d);
            idx = _mm_or_si128(_mm_and_si128(lt, at), _mm_andnot_si128(lt, idx));
            at = _mm_add_epi32(at, four);
        }
        let (mut f, mut s, mut i) = ([0f32; 4], [0f32; 4], [0i32; 4]);
        _mm_storeu_ps(f.as_mut_ptr(), first);
        _mm_storeu_ps(s.as_mut_ptr(), second);
        _mm_storeu_si128(i.as_mut_ptr() as *mut __m128i, idx);
        // The lane holding the smallest distance (the lowest index on ties); the second
        // smallest overall is the least of every lane's second and the other lanes' first.
        let mut w = 0;
        for l in 1..4 {
            if f[l] < f[w] || (f[l] == f[w] && i[l] < i[w]) {
                w = l;
            }
        }
        let mut d2 = s[w];
        for l in 0..4 {
            if l != w {
                d2 = d2.min(f[l]).min(s[l]);
            }
        }
        (i[w] as usize, f[w], d2)
    }
}

#[cfg(not(target_arch = "x86_64"))]
#[inline(always)]
fn nearest_two_blocks(x: &[f32], m: &MeansByDim) -> (usize, f32, f32) {
    let (mut best, mut d1, mut d2) = (0usize, f32::INFINITY, f32::INFINITY);
    for j0 in (0..m.kpad).step_by(LANES) {
        let mut d = [0.0f32; LANES];
        for (t, &xt) in x.iter().enumerate() {
            let col: &[f32; LANES] = m.v[t * m.kpad + j0..t * m.kpad + j0 + LANES]
                .try_into()
                .expect("a block of means");
            for l in 0..LANES {
                let v = xt - col[l];
                d[l] += v * v;
            }
        }
        scan_block(&d, j0, &mut best, &mut d1, &mut d2);
    }
    (best, d1, d2)
}

#[inline(always)]
fn nearest_two_by_dim_fixed<const D: usize>(x: &[f32], m: &MeansByDim) -> (usize, f32, f32) {
    let x: &[f32; D] = x.try_into().expect("row of D values");
    nearest_two_blocks(x, m)
}

/// [`nearest_two`] over means laid out by dimension: the same index and distances.
#[inline(always)]
pub(crate) fn nearest_two_by_dim(x: &[f32], m: &MeansByDim) -> (usize, f32, f32) {
    match m.dim {
        1 => nearest_two_by_dim_fixed::<1>(x, m),
        2 => nearest_two_by_dim_fixed::<2>(x, m),
        3 => nearest_two_by_dim_fixed::<3>(x, m),
        4 => nearest_two_by_dim_fixed::<4>(x, m),
        5 => nearest_two_by_dim_fixed::<5>(x, m),
        6 => nearest_two_by_dim_fixed::<6>(x, m),
        7 => nearest_two_by_dim_fixed::<7>(x, m),
        8 => nearest_two_by_dim_fixed::<8>(x, m),
        _ => nearest_two_blocks(x, m),
    }
}

/// Index and squared distance of the nearest of `k` means (lowest index on ties),
/// and the squared distance of the second nearest (infinite when k = 1).
#[inline(always)]
pub fn nearest_two(x: &[f32], means: &[f32], dim: usize) -> (usize, f32, f32) {
    // Fixed-size loops for the common dimensions (same arithmetic, unrolled).
    match dim {
        1 => return nearest_two_fixed::<1>(x, means),
        2 => return nearest_two_fixed::<2>(x, means),
        3 => return nearest_two_fixed::<3>(x, means),
        4 => return nearest_two_fixed::<4>(x, means),
        5 => return nearest_two_fixed::<5>(x, means),
        6 => return nearest_two_fixed::<6>(x, means),
        7 => return nearest_two_fixed::<7>(x, means),
        8 => return nearest_two_fixed::<8>(x, means),
        _ => {}
    }
    let mut best = 0usize;
    let mut d1 = f32::INFINITY;
    let mut d2 = f32::INFINITY;
    for (j, m) in means.chunks_exact(dim).enumerate() {
        let d = dist2(x, m);
        if d < d1 {
            d2 = d1;
            d1 = d;
            best = j;
        } else if d < d2 {
            d2 = d;
        }
    }
    (best, d1, d2)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    #[test]
    fn means_by_dim_give_exactly_the_row_layout_results() {
        let mut r = Rng::new(11, 0);
        for dim in 1..=10 {
            for k in [1, 2, 7, 8, 9, 16, 17, 40] {
                let means: Vec<f32> = (0..k * dim)
                    .map(|_| (r.uniform() * 200.0 - 100.0) as f32)
                    .collect();
                let by_dim = MeansByDim::new(&means, dim);
                for _ in 0..200 {
                    let x: Vec<f32> = (0..dim)
                        .map(|_| (r.uniform() * 240.0 - 120.0) as f32)
                        .collect();
                    let a = nearest_two(&x, &means, dim);
                    let b = nearest_two_by_dim(&x, &by_dim);
                    assert_eq!(a.0, b.0, "dim {dim} k {k}");
                    assert_eq!(a.1.to_bits(), b.1.to_bits());
                    assert_eq!(a.2.to_bits(), b.2.to_bits());
                }
                // A row equal to a mean, and ties between equal means: lowest index wins.
                let mut twice = means.clone();
                twice.extend_from_slice(&means[..dim]);
                let by_dim = MeansByDim::new(&twice, dim);
                let x = &means[..dim];
                assert_eq!(nearest_two(x, &twice, dim), nearest_two_by_dim(x, &by_dim));
                assert_eq!(nearest_two_by_dim(x, &by_dim).0, 0);
            }
        }
    }

    #[test]
    fn ties_across_lanes_resolve_to_the_lowest_index() {
        // Means on a coarse integer grid and rows on it too: many exactly equal
        // distances, spread over different lanes and blocks.
        let mut r = Rng::new(5, 0);
        for dim in 1..=4 {
            for k in [3, 5, 8, 13, 16, 33] {
                let means: Vec<f32> = (0..k * dim).map(|_| (r.below(3) as f32) - 1.0).collect();
                let by_dim = MeansByDim::new(&means, dim);
                for _ in 0..300 {
                    let x: Vec<f32> = (0..dim).map(|_| (r.below(5) as f32) - 2.0).collect();
                    let a = nearest_two(&x, &means, dim);
                    let b = nearest_two_by_dim(&x, &by_dim);
                    assert_eq!(a.0, b.0, "dim {dim} k {k} x {x:?}");
                    assert_eq!(a.1.to_bits(), b.1.to_bits());
                    assert_eq!(a.2.to_bits(), b.2.to_bits());
                }
            }
        }
    }
}
