//! Gaussian mixtures with a full covariance matrix per component, fitted by EM on weighted
//! rows and started from a k-means solution, and the two criteria that score them: the BIC
//! (Schwarz 1978) and the ICL (Biernacki, Celeux & Govaert 2000).
//!
//! Like the rest of the engine this sees only `n × d` rows and a weight per row (a
//! histogram entry and its pixel count count as that many identical rows). Sums run over
//! fixed chunks of [`CHUNK`] rows and are reduced in chunk order, so results do not depend
//! on the thread count.

use super::{assign_nearest, Dataset, CHUNK};
use rayon::prelude::*;

/// How a mixture is fitted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MixtureSettings {
    /// Added to the diagonal of every covariance after each M-step, in squared feature
    /// units (the same rule as scikit-learn's `reg_covar`). Keeps a component on one
    /// repeated value (a flat area, an 8-bit level) from collapsing to zero variance.
    pub floor: f64,
    /// Most EM iterations.
    pub max_iter: usize,
    /// Stop when an iteration raises the mean log-likelihood per unit of weight by at most
    /// this (scikit-learn's `tol` has the same meaning).
    pub tolerance: f64,
    /// When the data has more rows than this, EM iterates on a seeded sample of this many
    /// rows drawn in proportion to weight; the reported likelihood is always that of all rows.
    pub fit_rows: usize,
}

impl MixtureSettings {
    /// Defaults: at most 100 iterations and tolerance 10⁻³ (scikit-learn's defaults), fit
    /// on at most 10 000 rows.
    pub fn new(floor: f64) -> Self {
        MixtureSettings {
            floor,
            max_iter: 100,
            tolerance: 1e-3,
            fit_rows: 10_000,
        }
    }
}

/// A fitted mixture and its scores on all rows.
#[derive(Debug, Clone, PartialEq)]
pub struct Mixture {
    pub dim: usize,
    /// Mixing weights, summing to 1.
    pub weights: Vec<f64>,
    /// `K × d` means.
    pub means: Vec<f64>,
    /// `K × d × d` covariances (floor included).
    pub covariances: Vec<f64>,
    /// ln L of all rows, each counted by its weight (natural log).
    pub log_likelihood: f64,
    /// Σ_i w_i · ln max_k t_ik: the log-probability of each row's most likely component
    /// (≤ 0), the classification term of the ICL.
    pub log_map_responsibility: f64,
    /// Total weight N of the rows.
    pub total_weight: f64,
    pub iterations: usize,
    pub converged: bool,
}

impl Mixture {
    /// Number of components K.
    pub fn k(&self) -> usize {
        self.weights.len()
    }
    /// Free parameters: K·d means, K·d(d+1)/2 covariance entries, K − 1 weights.
    pub fn parameters(&self) -> usize {
        free_parameters(self.k(), self.dim)
    }
    /// BIC = p·ln N − 2·ln L (Schwarz 1978). Lower is better.
    pub fn bic(&self) -> f64 {
        self.parameters() as f64 * self.total_weight.ln() - 2.0 * self.log_likelihood
    }
    /// ICL = BIC − 2·Σ_i ln t_i,ẑ(i), with ẑ(i) the most likely component of row i
    /// (Biernacki, Celeux & Govaert 2000): the BIC plus a penalty for rows the mixture
    /// cannot assign with confidence. Lower is better.
    pub fn icl(&self) -> f64 {
        self.bic() - 2.0 * self.log_map_responsibility
    }
}

/// Free parameters of a K-component, d-dimensional full-covariance Gaussian mixture.
pub fn free_parameters(k: usize, d: usize) -> usize {
    k * d + k * d * (d + 1) / 2 + k.saturating_sub(1)
}

/// Per-component parameters ready for density evaluation.
struct Component {
    mean: Vec<f64>,
    /// Lower Cholesky factor of the covariance, row-major d × d.
    chol: Vec<f64>,
    /// 1 / its diagonal.
    inv_diag: Vec<f64>,
    /// ln weight − (d·ln 2π + ln det Σ) / 2.
    log_norm: f64,
}

/// Weighted sufficient statistics about fixed centres `c_k` (the current means, for
/// accuracy): n_k, Σ w·t·(x − c_k), Σ w·t·(x − c_k)(x − c_k)ᵀ (full d × d).
#[derive(Clone)]
struct Stats {
    n: Vec<f64>,
    s1: Vec<f64>,
    s2: Vec<f64>,
    log_l: f64,
    log_map: f64,
}

impl Stats {
    fn zero(k: usize, d: usize) -> Self {
        Stats {
            n: vec![0.0; k],
            s1: vec![0.0; k * d],
            s2: vec![0.0; k * d * d],
            log_l: 0.0,
            log_map: 0.0,
        }
    }
    fn add(&mut self, o: &Stats) {
        for (a, b) in self.n.iter_mut().zip(&o.n) {
            *a += b;
        }
        for (a, b) in self.s1.iter_mut().zip(&o.s1) {
            *a += b;
        }
        for (a, b) in self.s2.iter_mut().zip(&o.s2) {
            *a += b;
        }
        self.log_l += o.log_l;
        self.log_map += o.log_map;
    }
}

/// Cholesky factor of a symmetric positive-definite d × d matrix; None if not positive.
fn cholesky(a: &[f64], d: usize) -> Option<Vec<f64>> {
    let mut l = vec![0.0; d * d];
    for i in 0..d {
        for j in 0..=i {
            let mut s = a[i * d + j];
            for p in 0..j {
                s -= l[i * d + p] * l[j * d + p];
            }
            if i == j {
                if s.is_nan() || s <= 0.0 {
                    return None;
                }
                l[i * d + i] = s.sqrt();
            } else {
                l[i * d + j] = s / l[j * d + j];
            }
        }
    }
    Some(l)
}

fn components(weights: &[f64], means: &[f64], covs: &[f64], d: usize) -> Vec<Component> {
    (0..weights.len())
        .map(|k| {
            let cov = &covs[k * d * d..(k + 1) * d * d];
            // The floor keeps covariances positive definite; should rounding defeat it,
            // the diagonal alone stands in.
            let chol = cholesky(cov, d).unwrap_or_else(|| {
                let mut l = vec![0.0; d * d];
                for i in 0..d {
                    l[i * d + i] = cov[i * d + i].max(f64::MIN_POSITIVE).sqrt();
                }
                l
            });
            let log_det = 2.0 * (0..d).map(|i| chol[i * d + i].ln()).sum::<f64>();
            let ln2pi = (2.0 * std::f64::consts::PI).ln();
            Component {
                log_norm: weights[k].ln() - 0.5 * (d as f64 * ln2pi + log_det),
                mean: means[k * d..(k + 1) * d].to_vec(),
                inv_diag: (0..d).map(|i| 1.0 / chol[i * d + i]).collect(),
                chol,
            }
        })
        .collect()
}

/// One E-step over all rows: log-likelihood, MAP term and, when `stats` is set, the
/// statistics about `centres` (`K × d`) for the next M-step.
fn e_step(data: &Dataset, comps: &[Component], centres: &[f64], stats: bool) -> Stats {
    let d = data.dim();
    let k = comps.len();
    let parts: Vec<Stats> = data
        .rows()
        .par_chunks(CHUNK * d)
        .enumerate()
        .map(|(ci, chunk)| {
            let mut st = Stats::zero(k, d);
            let mut lp = vec![0.0f64; k];
            let mut z = vec![0.0f64; d];
            let mut x = vec![0.0f64; d];
            for (ri, row) in chunk.chunks_exact(d).enumerate() {
                let w = data.weight(ci * CHUNK + ri);
                if w == 0.0 {
                    continue;
                }
                for (xv, &r) in x.iter_mut().zip(row) {
                    *xv = r as f64;
                }
                for (j, c) in comps.iter().enumerate() {
                    // Solve L z = x − μ; Mahalanobis distance is |z|².
                    let mut m2 = 0.0;
                    for i in 0..d {
                        let mut s = x[i] - c.mean[i];
                        for (l, zp) in c.chol[i * d..i * d + i].iter().zip(&z[..i]) {
                            s -= l * zp;
                        }
                        z[i] = s * c.inv_diag[i];
                        m2 += z[i] * z[i];
                    }
                    lp[j] = c.log_norm - 0.5 * m2;
                }
                let top = lp.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                // Components more than 40 nats below the top add less than 5·10⁻¹⁸ of it,
                // under f64 resolution: skipped, and their responsibility taken as zero.
                let sum: f64 = lp
                    .iter()
                    .map(|v| {
                        if v - top > -40.0 {
                            (v - top).exp()
                        } else {
                            0.0
                        }
                    })
                    .sum();
                let lse = top + sum.ln();
                st.log_l += w * lse;
                st.log_map += w * (top - lse);
                if !stats {
                    continue;
                }
                for j in 0..k {
                    if lp[j] - top <= -40.0 {
                        continue;
                    }
                    let t = w * (lp[j] - lse).exp();
                    st.n[j] += t;
                    let cj = &centres[j * d..(j + 1) * d];
                    for a in 0..d {
                        let da = x[a] - cj[a];
                        st.s1[j * d + a] += t * da;
                        for b in 0..=a {
                            st.s2[(j * d + a) * d + b] += t * da * (x[b] - cj[b]);
                        }
                    }
                }
            }
            st
        })
        .collect();
    let mut total = Stats::zero(k, d);
    for p in &parts {
        total.add(p);
    }
    // Fill the upper triangles.
    for j in 0..k {
        for a in 0..d {
            for b in 0..a {
                total.s2[(j * d + b) * d + a] = total.s2[(j * d + a) * d + b];
            }
        }
    }
    total
}

/// M-step from statistics about `centres`: weights, means and covariances (with the floor).
fn m_step(st: &Stats, centres: &[f64], d: usize, floor: f64) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let k = st.n.len();
    // As scikit-learn: a tiny amount added to every count keeps an emptied component finite.
    let n: Vec<f64> = st.n.iter().map(|v| v + 10.0 * f64::EPSILON).collect();
    let total: f64 = n.iter().sum();
    let weights: Vec<f64> = n.iter().map(|v| v / total).collect();
    let mut means = vec![0.0; k * d];
    let mut covs = vec![0.0; k * d * d];
    for j in 0..k {
        let delta: Vec<f64> = (0..d).map(|a| st.s1[j * d + a] / n[j]).collect();
        for a in 0..d {
            means[j * d + a] = centres[j * d + a] + delta[a];
            for b in 0..d {
                covs[(j * d + a) * d + b] = st.s2[(j * d + a) * d + b] / n[j] - delta[a] * delta[b];
            }
            covs[(j * d + a) * d + a] += floor;
        }
    }
    (weights, means, covs)
}

/// Fits a full-covariance Gaussian mixture by EM, started from the hard partition of the
/// rows by their nearest of `start_means` (`K × d`, typically a k-means solution): the
/// starting weights, means and covariances are those of that partition (floor added).
/// `seed` draws the fitting sample when the data has more than `settings.fit_rows` rows.
pub fn fit_mixture(
    data: &Dataset,
    start_means: &[f64],
    settings: &MixtureSettings,
    seed: u64,
) -> Mixture {
    let d = data.dim();
    let k = start_means.len() / d;
    // The rows EM iterates on: all of them, or a seeded weighted sample (rows drawn more
    // than once carry the count as weight).
    let (sample_rows, sample_w);
    let fit_data = if data.len() > settings.fit_rows {
        let (rows, w) = super::choose::sampled_rows(data, settings.fit_rows, seed);
        sample_rows = rows;
        sample_w = w;
        Dataset::new(&sample_rows, d, Some(&sample_w)).expect("sampled rows are valid")
    } else {
        *data
    };
    let start32: Vec<f32> = start_means.iter().map(|&v| v as f32).collect();
    let (labels, _) = assign_nearest(&fit_data, &start32);
    // Hard statistics of the starting partition, about the starting means.
    let mut st = Stats::zero(k, d);
    for (i, &l) in labels.iter().enumerate() {
        let (j, w) = (l as usize, fit_data.weight(i));
        st.n[j] += w;
        let row = fit_data.row(i);
        for a in 0..d {
            let da = row[a] as f64 - start_means[j * d + a];
            st.s1[j * d + a] += w * da;
            for b in 0..d {
                st.s2[(j * d + a) * d + b] += w * da * (row[b] as f64 - start_means[j * d + b]);
            }
        }
    }
    let (mut weights, mut means, mut covs) = m_step(&st, start_means, d, settings.floor);
    let fit_total = fit_data.total_weight();
    let mut prev = f64::NEG_INFINITY;
    let mut iterations = 0;
    let mut converged = false;
    while iterations < settings.max_iter {
        iterations += 1;
        let comps = components(&weights, &means, &covs, d);
        let st = e_step(&fit_data, &comps, &means, true);
        let mean_ll = st.log_l / fit_total;
        (weights, means, covs) = m_step(&st, &means, d, settings.floor);
        if (mean_ll - prev).abs() < settings.tolerance {
            converged = true;
            break;
        }
        prev = mean_ll;
    }
    // Scores of the final parameters on every row.
    let comps = components(&weights, &means, &covs, d);
    let fin = e_step(data, &comps, &means, false);
    Mixture {
        dim: d,
        weights,
        means,
        covariances: covs,
        log_likelihood: fin.log_l,
        log_map_responsibility: fin.log_map,
        total_weight: data.total_weight(),
        iterations,
        converged,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parameters_of_a_full_covariance_mixture() {
        // d = 3: 3 means + 6 covariance entries per component, K − 1 weights.
        assert_eq!(free_parameters(1, 3), 9);
        assert_eq!(free_parameters(4, 3), 4 * 9 + 3);
        assert_eq!(free_parameters(2, 1), 2 + 2 + 1);
    }

    #[test]
    fn one_component_is_the_sample_gaussian() {
        // Rows 0, 1, 2, 3 (d = 1), weights 1, 2, 3, 4: mean 2, variance 1 (by hand).
        // ln L = −N/2·(ln 2π + ln σ² + 1) with N = 10.
        let rows = [0.0f32, 1.0, 2.0, 3.0];
        let w = [1.0, 2.0, 3.0, 4.0];
        let data = Dataset::new(&rows, 1, Some(&w)).unwrap();
        let m = fit_mixture(&data, &[0.5], &MixtureSettings::new(0.0), 1);
        assert!((m.means[0] - 2.0).abs() < 1e-12);
        assert!((m.covariances[0] - 1.0).abs() < 1e-12);
        let want = -5.0 * ((2.0 * std::f64::consts::PI).ln() + 1.0);
        assert!(
            (m.log_likelihood - want).abs() < 1e-9,
            "{}",
            m.log_likelihood
        );
        assert!(m.log_map_responsibility.abs() < 1e-12);
        assert!((m.icl() - m.bic()).abs() < 1e-9);
        // With a floor the variance is 1 + floor.
        let f = fit_mixture(&data, &[0.5], &MixtureSettings::new(0.5), 1);
        assert!((f.covariances[0] - 1.5).abs() < 1e-12);
    }

    #[test]
    fn weighted_rows_equal_repeated_rows() {
        let rows = [
            0.0f32, 0.0, 1.0, 0.2, 5.0, 5.0, 6.0, 5.5, 0.3, 1.0, 5.2, 6.1,
        ];
        let w = [3.0, 1.0, 2.0, 1.0, 2.0, 1.0];
        let mut rep = Vec::new();
        for (r, &c) in rows.chunks(2).zip(&w) {
            for _ in 0..c as usize {
                rep.extend_from_slice(r);
            }
        }
        let a = fit_mixture(
            &Dataset::new(&rows, 2, Some(&w)).unwrap(),
            &[0.0, 0.0, 5.0, 5.0],
            &MixtureSettings::new(0.01),
            1,
        );
        let b = fit_mixture(
            &Dataset::new(&rep, 2, None).unwrap(),
            &[0.0, 0.0, 5.0, 5.0],
            &MixtureSettings::new(0.01),
            1,
        );
        assert!((a.log_likelihood - b.log_likelihood).abs() < 1e-9);
        assert!((a.bic() - b.bic()).abs() < 1e-9);
        for (x, y) in a.covariances.iter().zip(&b.covariances) {
            assert!((x - y).abs() < 1e-9);
        }
    }
}
