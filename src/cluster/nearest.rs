//! The nearest and second-nearest mean of a row: the kernel every pass runs, over means
//! laid out by row or by dimension (bit-identical results).

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

// Kernel twin of `nearest_two_fixed` (deliberate): the any-dimension fallback, same
// comparisons in the same order (ties to the lowest index) as the unrolled copies.
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
