//! Soft k-means (MacKay 2003, ch. 20): r_ik = exp(−β·d_ik) / Σ_j exp(−β·d_ij) with
//! d_ik = ½‖x_i − m_k‖², means weighted by responsibilities, in log-sum-exp form.

use super::{Dataset, CHUNK};
use rayon::prelude::*;

/// Terms with β·(d − d_min) above this weigh less than e⁻³⁰ ≈ 1e-13 and are skipped.
const NEGLIGIBLE: f64 = 30.0;

/// Outcome of [`soft_kmeans`].
#[derive(Debug, Clone, PartialEq)]
pub struct SoftResult {
    /// Final means, `k × dim`.
    pub means: Vec<f64>,
    /// Iterations run.
    pub iterations: usize,
    /// Free energy F = −(1/β) Σ_i w_i ln Σ_k exp(−β d_ik) after each iteration.
    pub free_energy: Vec<f64>,
    /// True when the relative change of F fell to the tolerance.
    pub converged: bool,
}

/// Per-row results of a soft assignment.
#[derive(Debug, Clone, PartialEq)]
pub struct SoftAssignment {
    /// Most probable cluster (the nearest mean; lowest index on ties).
    pub labels: Vec<u32>,
    /// Normalised entropy H(r)/ln K in 0..1 (0 when K = 1).
    pub entropy: Vec<f32>,
}

/// β = 1/σ² with σ² = SSE / (W·d), the pooled within-cluster variance per dimension of
/// a hard solution. `None` when σ² is zero (every row on its mean: the hard limit).
pub fn auto_beta(sse: f64, total_weight: f64, dim: usize) -> Option<f64> {
    let var = sse / (total_weight * dim as f64);
    if var > 0.0 && var.is_finite() {
        Some(1.0 / var)
    } else {
        None
    }
}

#[inline(always)]
fn half_d2_fixed<const D: usize>(x: &[f32], means: &[f64], out: &mut [f64]) -> usize {
    let x: &[f32; D] = x.try_into().expect("row of D values");
    let mut best = 0;
    for (j, m) in means.chunks_exact(D).enumerate() {
        let mut s = 0.0f64;
        for t in 0..D {
            let d = x[t] as f64 - m[t];
            s += d * d;
        }
        out[j] = 0.5 * s;
        if out[j] < out[best] {
            best = j;
        }
    }
    best
}

// Kernel twin of `half_d2_fixed` (deliberate): the fallback for dimensions above 6, with
// the same arithmetic in the same order, so results do not depend on which one ran.
/// Half squared distances from `x` to each mean, into `out`; returns the minimum's index.
#[inline]
fn half_d2(x: &[f32], means: &[f64], dim: usize, out: &mut [f64]) -> usize {
    match dim {
        1 => return half_d2_fixed::<1>(x, means, out),
        2 => return half_d2_fixed::<2>(x, means, out),
        3 => return half_d2_fixed::<3>(x, means, out),
        4 => return half_d2_fixed::<4>(x, means, out),
        5 => return half_d2_fixed::<5>(x, means, out),
        6 => return half_d2_fixed::<6>(x, means, out),
        _ => {}
    }
    let mut best = 0;
    for (j, m) in means.chunks_exact(dim).enumerate() {
        let mut s = 0.0f64;
        for (a, b) in x.iter().zip(m) {
            let d = *a as f64 - b;
            s += d * d;
        }
        out[j] = 0.5 * s;
        if out[j] < out[best] {
            best = j;
        }
    }
    best
}

/// Responsibilities of one row into `r` (given half squared distances `d`, minimum at
/// `best`); returns ln Σ_k exp(−β(d_k − d_best)).
#[inline]
fn responsibilities(d: &[f64], best: usize, beta: f64, r: &mut [f64]) -> f64 {
    let dmin = d[best];
    let mut z = 0.0;
    for (rk, &dk) in r.iter_mut().zip(d) {
        let e = beta * (dk - dmin);
        // Single-precision exp: ample for weights (relative error ~1e-7) and about twice
        // as fast; sums stay in f64.
        *rk = if e > NEGLIGIBLE {
            0.0
        } else {
            (-(e as f32)).exp() as f64
        };
        z += *rk;
    }
    for rk in r.iter_mut() {
        *rk /= z;
    }
    z.ln()
}

/// Soft k-means from `init` means at sharpness `beta` until the relative change of the
/// free energy is at most `tolerance` or `max_iter` iterations.
pub fn soft_kmeans(
    data: &Dataset,
    init: &[f64],
    beta: f64,
    max_iter: usize,
    tolerance: f64,
) -> SoftResult {
    soft_kmeans_fixed(data, init, 0, beta, max_iter, tolerance)
}

/// As [`soft_kmeans`], with the first `fixed` means of `init` never moved.
pub fn soft_kmeans_fixed(
    data: &Dataset,
    init: &[f64],
    fixed: usize,
    beta: f64,
    max_iter: usize,
    tolerance: f64,
) -> SoftResult {
    let dim = data.dim();
    let k = init.len() / dim;
    let mut means = init.to_vec();
    let mut free_energy = Vec::new();
    let mut converged = false;
    let stride = dim + 1;
    let n = data.len();
    let n_chunks = n.div_ceil(CHUNK);
    let mut iterations = 0;
    while iterations < max_iter {
        iterations += 1;
        let m = &means;
        let partial: Vec<(Vec<f64>, f64)> = (0..n_chunks)
            .into_par_iter()
            .map(|c| {
                let mut acc = vec![0.0f64; k * stride];
                let mut d = vec![0.0f64; k];
                let mut r = vec![0.0f64; k];
                let mut f = 0.0f64;
                for i in c * CHUNK..((c + 1) * CHUNK).min(n) {
                    let w = data.weight(i);
                    if w == 0.0 {
                        continue;
                    }
                    let x = data.row(i);
                    let best = half_d2(x, m, dim, &mut d);
                    let lz = responsibilities(&d, best, beta, &mut r);
                    f += w * (d[best] - lz / beta);
                    for (j, &rj) in r.iter().enumerate() {
                        if rj == 0.0 {
                            continue;
                        }
                        let wr = w * rj;
                        acc[j * stride] += wr;
                        for (t, &xv) in x.iter().enumerate() {
                            acc[j * stride + 1 + t] += wr * xv as f64;
                        }
                    }
                }
                (acc, f)
            })
            .collect();
        let mut acc = vec![0.0f64; k * stride];
        let mut f = 0.0;
        for (p, pf) in partial {
            for (a, b) in acc.iter_mut().zip(p) {
                *a += b;
            }
            f += pf;
        }
        // F was evaluated at the means before this update.
        for j in fixed.min(k)..k {
            let wj = acc[j * stride];
            if wj > 0.0 {
                for t in 0..dim {
                    means[j * dim + t] = acc[j * stride + 1 + t] / wj;
                }
            }
        }
        let prev = free_energy.last().copied();
        free_energy.push(f);
        if let Some(p) = prev {
            if (p - f).abs() <= tolerance * f.abs().max(f64::MIN_POSITIVE) {
                converged = true;
                break;
            }
        }
    }
    SoftResult {
        means,
        iterations,
        free_energy,
        converged,
    }
}

/// Soft assignment of every row to `means` at sharpness `beta` (`None` = hard limit):
/// the most probable cluster and the normalised entropy of the responsibilities.
pub fn soft_assign(data: &Dataset, means: &[f64], beta: Option<f64>) -> SoftAssignment {
    let dim = data.dim();
    let k = means.len() / dim;
    let n = data.len();
    let mut labels = vec![0u32; n];
    let mut entropy = vec![0.0f32; n];
    let ln_k = (k as f64).ln();
    labels
        .par_chunks_mut(CHUNK)
        .zip(entropy.par_chunks_mut(CHUNK))
        .enumerate()
        .for_each(|(c, (ls, es))| {
            let mut d = vec![0.0f64; k];
            let mut r = vec![0.0f64; k];
            for o in 0..ls.len() {
                let i = c * CHUNK + o;
                let best = half_d2(data.row(i), means, dim, &mut d);
                ls[o] = best as u32;
                es[o] = match beta {
                    Some(b) if k > 1 => {
                        // H = ln z + β Σ_j r_j (d_j − d_min), with r_j = exp(−β(d_j − d_min)) / z:
                        // one logarithm per row instead of one per cluster.
                        let lz = responsibilities(&d, best, b, &mut r);
                        let dmin = d[best];
                        let spread: f64 = r
                            .iter()
                            .zip(&d)
                            .filter(|(p, _)| **p > 0.0)
                            .map(|(p, dj)| p * (dj - dmin))
                            .sum();
                        ((lz + b * spread) / ln_k).clamp(0.0, 1.0) as f32
                    }
                    _ => 0.0,
                };
            }
        });
    SoftAssignment { labels, entropy }
}

/// Responsibilities of every row (`n × k`, row-major) at sharpness `beta`.
pub fn responsibility_matrix(data: &Dataset, means: &[f64], beta: f64) -> Vec<f64> {
    let dim = data.dim();
    let k = means.len() / dim;
    let mut out = vec![0.0f64; data.len() * k];
    out.par_chunks_mut(k * CHUNK)
        .enumerate()
        .for_each(|(c, block)| {
            let mut d = vec![0.0f64; k];
            for (o, r) in block.chunks_mut(k).enumerate() {
                let best = half_d2(data.row(c * CHUNK + o), means, dim, &mut d);
                responsibilities(&d, best, beta, r);
            }
        });
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_means_hand_worked() {
        // x = 0, means −1 and 3, β = 0.5: d = ½, 9/2 → r ∝ e^{−¼}, e^{−9/4}.
        let rows = [0.0f32];
        let data = Dataset::new(&rows, 1, None).unwrap();
        let r = responsibility_matrix(&data, &[-1.0, 3.0], 0.5);
        let a = (-0.25f64).exp();
        let b = (-2.25f64).exp();
        // Exponentials are single precision (relative error about 1e-7).
        assert!((r[0] - a / (a + b)).abs() < 1e-7);
        assert!((r[1] - b / (a + b)).abs() < 1e-7);
    }

    #[test]
    fn huge_beta_does_not_underflow() {
        let rows = [0.0f32, 10.0];
        let data = Dataset::new(&rows, 1, None).unwrap();
        let r = responsibility_matrix(&data, &[1.0, 9.0], 1e12);
        assert_eq!(r, vec![1.0, 0.0, 0.0, 1.0]);
        let s = soft_assign(&data, &[1.0, 9.0], Some(1e12));
        assert_eq!(s.entropy, vec![0.0, 0.0]);
    }

    #[test]
    fn midpoint_has_maximal_entropy() {
        let rows = [5.0f32, 1.0];
        let data = Dataset::new(&rows, 1, None).unwrap();
        let s = soft_assign(&data, &[1.0, 9.0], Some(0.1));
        assert!((s.entropy[0] - 1.0).abs() < 1e-6);
        assert!(s.entropy[1] < s.entropy[0]);
    }

    #[test]
    fn auto_beta_is_inverse_pooled_variance() {
        // SSE 24 over weight 4 in 3 dimensions: σ² = 2, β = 0.5.
        assert_eq!(auto_beta(24.0, 4.0, 3), Some(0.5));
        assert_eq!(auto_beta(0.0, 4.0, 3), None);
    }
}
