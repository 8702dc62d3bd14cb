//! Choosing K: a warm-started path of fits over a range of K, and two published criteria
//! to compare them, the mean silhouette (Rousseeuw 1987) and the BIC (Schwarz 1978) of
//! the matching isotropic Gaussian mixture, and the stability of a partition across seeded
//! subsamples (adjusted Rand index, after Lange, Roth, Braun & Buhmann 2004).

use super::hard::{assign_nearest, lloyd, LloydResult, Stop};
use super::init::{kmeans_plus_plus, kmeans_plus_plus_from};
use super::model::{refine_summary, REFINE_STREAM};
use super::refine::{refine_means, Refine};
use super::{dist2, Dataset};
use crate::rng::Rng;
use rayon::prelude::*;

/// The settings of a [`k_path`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KPath {
    /// Smallest K handed to the step (the path itself always starts at K = 1).
    pub k_min: usize,
    pub k_max: usize,
    pub seed: u64,
    pub stop: Stop,
    pub accelerate: bool,
    /// The global refinement run after each K's k-means++ extension, as after each start
    /// of a fit (see `refine.rs`).
    pub refine: Refine,
    /// Relative SSE tolerance of the refinement's trial runs.
    pub tolerance: f64,
}

/// Fits K = 1, 2, … up to `k_max`: K = 1 from seeded k-means++, each next one from the
/// previous solution plus one greedy k-means++ centre, then the global refinement (on a
/// grid summary of the rows, as in a fit), each polished by Lloyd. `step` sees the fits
/// with K ≥ `k_min` in turn and returns false to stop early. The path also stops when the
/// data has no more distinct rows than the last K.
///
/// The path always starts at K = 1, so the fit at each K depends only on the data, `seed`
/// and the settings, never on the range asked: a sweep over 2..16 and a search for the
/// smallest K meeting a target see the same fit at every K.
pub fn k_path(data: &Dataset, path: &KPath, mut step: impl FnMut(usize, &LloydResult) -> bool) {
    let dim = data.dim();
    let mut prev: Option<Vec<f32>> = None;
    for k in 1..=path.k_max {
        // One generator stream per K: reproducible whatever the range asked.
        let mut rng = Rng::new(path.seed, k as u64);
        let mut init = match &prev {
            None => kmeans_plus_plus(data, k, &mut rng),
            Some(p) => kmeans_plus_plus_from(data, p, k, &mut rng),
        };
        if init.len() / dim < k {
            return; // fewer distinct rows than K
        }
        if k >= 2 && !path.refine.is_none() {
            let summary = refine_summary(data, k);
            let on = summary
                .as_ref()
                .and_then(|(rows, w)| Dataset::new(rows, dim, Some(w)).ok());
            let mut rng = Rng::new(path.seed, REFINE_STREAM | k as u64);
            init = refine_means(
                on.as_ref().unwrap_or(data),
                &init,
                path.refine,
                path.tolerance,
                &mut rng,
            )
            .means;
        }
        let res = lloyd(data, &init, path.stop, path.accelerate);
        prev = Some(res.means.iter().map(|&v| v as f32).collect());
        if k >= path.k_min && !step(k, &res) {
            return;
        }
    }
}

/// The rows of a [`weighted_sample`] of `n` draws, each drawn row once with the number of
/// times it was drawn as its weight (rows and weights, in row order).
pub(crate) fn sampled_rows(data: &Dataset, n: usize, seed: u64) -> (Vec<f32>, Vec<f64>) {
    let picks = weighted_sample(data, n, seed);
    let mut rows = Vec::with_capacity(picks.len() * data.dim());
    let mut w: Vec<f64> = Vec::new();
    let mut last = usize::MAX;
    for &i in &picks {
        if i == last {
            *w.last_mut().expect("a row was pushed") += 1.0;
        } else {
            rows.extend_from_slice(data.row(i));
            w.push(1.0);
            last = i;
        }
    }
    (rows, w)
}

/// Indices of `n` rows drawn with probability proportional to weight, with replacement,
/// from a seeded generator (a sample of pixels when rows are histogram entries).
pub fn weighted_sample(data: &Dataset, n: usize, seed: u64) -> Vec<usize> {
    let mut cum = Vec::with_capacity(data.len());
    let mut s = 0.0f64;
    for i in 0..data.len() {
        s += data.weight(i);
        cum.push(s);
    }
    if s <= 0.0 {
        return Vec::new();
    }
    let mut rng = Rng::new(seed, 0x5111);
    let mut out: Vec<usize> = (0..n)
        .map(|_| {
            let u = rng.uniform() * s;
            cum.partition_point(|&c| c <= u).min(data.len() - 1)
        })
        .collect();
    out.sort_unstable();
    out
}

/// Mean silhouette width (Rousseeuw 1987) of `rows` (`n × dim`) under `labels`, with
/// Euclidean distances: s(i) = (b − a) / max(a, b), a the mean distance from i to the
/// other members of its cluster, b the smallest mean distance to another cluster; s = 0
/// for a point alone in its cluster. None when fewer than two clusters are occupied.
/// Exact, O(n²·dim); the same definition as scikit-learn's `silhouette_score`.
pub fn silhouette(rows: &[f32], dim: usize, labels: &[u32]) -> Option<f64> {
    let n = labels.len();
    let k = labels.iter().map(|&l| l as usize + 1).max().unwrap_or(0);
    let mut size = vec![0usize; k];
    for &l in labels {
        size[l as usize] += 1;
    }
    if size.iter().filter(|&&c| c > 0).count() < 2 {
        return None;
    }
    let s: Vec<f64> = (0..n)
        .into_par_iter()
        .with_min_len(64)
        .map(|i| {
            let xi = &rows[i * dim..(i + 1) * dim];
            let mut sum = vec![0.0f64; k];
            for j in 0..n {
                let d = (dist2(xi, &rows[j * dim..(j + 1) * dim]) as f64).sqrt();
                sum[labels[j] as usize] += d;
            }
            let own = labels[i] as usize;
            if size[own] <= 1 {
                return 0.0;
            }
            let a = sum[own] / (size[own] - 1) as f64;
            let b = (0..k)
                .filter(|&c| c != own && size[c] > 0)
                .map(|c| sum[c] / size[c] as f64)
                .fold(f64::INFINITY, f64::min);
            let m = a.max(b);
            if m > 0.0 {
                (b - a) / m
            } else {
                0.0
            }
        })
        .collect();
    Some(s.iter().sum::<f64>() / n as f64)
}

/// BIC = p·ln N − 2·ln L (Schwarz 1978) of the isotropic Gaussian mixture that matches a
/// hard k-means solution: mixing weights n_j / N, the K means, and one shared variance
/// σ² = SSE / (N·dim) (the maximum-likelihood value); L is the classification
/// likelihood of the hard assignment, and p = (K − 1) + K·dim + 1. Lower is better.
/// `cluster_weights` are the n_j (pixels when rows are histogram entries). None when the
/// SSE is zero (every point on its mean: the likelihood is unbounded).
pub fn bic(sse: f64, cluster_weights: &[f64], dim: usize) -> Option<f64> {
    let n: f64 = cluster_weights.iter().sum();
    if !(sse > 0.0 && n > 0.0) {
        return None;
    }
    let d = dim as f64;
    let k = cluster_weights.iter().filter(|&&w| w > 0.0).count() as f64;
    let var = sse / (n * d);
    let mix: f64 = cluster_weights
        .iter()
        .filter(|&&w| w > 0.0)
        .map(|&w| w * (w / n).ln())
        .sum();
    let log_l = mix - 0.5 * n * d * (2.0 * std::f64::consts::PI * var).ln() - 0.5 * n * d;
    let p = (k - 1.0) + k * d + 1.0;
    Some(p * n.ln() - 2.0 * log_l)
}

/// Adjusted Rand index (Hubert & Arabie 1985) between two labellings of the same points:
/// 1 for identical partitions (whatever the label numbers), about 0 for independent ones.
/// 1 when both put every point in one cluster (the index is then 0/0).
pub fn adjusted_rand_index(a: &[u32], b: &[u32]) -> f64 {
    assert_eq!(a.len(), b.len(), "labellings of the same points");
    let ka = a.iter().map(|&l| l as usize + 1).max().unwrap_or(0);
    let kb = b.iter().map(|&l| l as usize + 1).max().unwrap_or(0);
    let mut table = vec![0u64; ka * kb];
    let (mut ra, mut rb) = (vec![0u64; ka], vec![0u64; kb]);
    for (&x, &y) in a.iter().zip(b) {
        table[x as usize * kb + y as usize] += 1;
        ra[x as usize] += 1;
        rb[y as usize] += 1;
    }
    let pairs = |c: u64| (c * c.saturating_sub(1)) as f64 / 2.0;
    let index: f64 = table.iter().map(|&c| pairs(c)).sum();
    let sa: f64 = ra.iter().map(|&c| pairs(c)).sum();
    let sb: f64 = rb.iter().map(|&c| pairs(c)).sum();
    let expected = sa * sb / pairs(a.len() as u64).max(1.0);
    let max = 0.5 * (sa + sb);
    if (max - expected).abs() < 1e-12 {
        return 1.0;
    }
    (index - expected) / (max - expected)
}

/// Stability of k-means at `k` (after Lange, Roth, Braun & Buhmann 2004): `runs` fits,
/// each on its own seeded sample of `sample` rows drawn in proportion to weight and
/// started from its own seeded k-means++, label the same `eval` rows (`m × dim`) by
/// nearest mean; the result is the mean adjusted Rand index over all pairs of runs. Near 1
/// when every subsample finds the same partition, lower when the partition depends on
/// which points were drawn or where the fit started. None for k < 2 or runs < 2.
pub fn stability(
    data: &Dataset,
    k: usize,
    eval: &[f32],
    sample: usize,
    runs: usize,
    seed: u64,
    stop: Stop,
) -> Option<f64> {
    if k < 2 || runs < 2 {
        return None;
    }
    let dim = data.dim();
    let eval_data = Dataset::new(eval, dim, None).ok()?;
    let labels: Vec<Vec<u32>> = (0..runs)
        .into_par_iter()
        .map(|r| {
            let tag = ((k as u64) << 8) | r as u64;
            let (rows, w) =
                sampled_rows(data, sample, seed ^ tag.wrapping_mul(0x9E37_79B9_7F4A_7C15));
            let sub = Dataset::new(&rows, dim, Some(&w)).expect("sampled rows are valid");
            let mut rng = Rng::new(seed, 0x57AB_0000 ^ tag);
            let init = kmeans_plus_plus(&sub, k, &mut rng);
            let means: Vec<f32> = if init.len() / dim < k {
                init // fewer distinct rows than k in this sample
            } else {
                lloyd(&sub, &init, stop, true)
                    .means
                    .iter()
                    .map(|&v| v as f32)
                    .collect()
            };
            assign_nearest(&eval_data, &means).0
        })
        .collect();
    let mut sum = 0.0;
    let mut n = 0usize;
    for i in 0..runs {
        for j in i + 1..runs {
            sum += adjusted_rand_index(&labels[i], &labels[j]);
            n += 1;
        }
    }
    Some(sum / n as f64)
}

/// One bin of a reliability table: predicted probabilities in [lo, hi).
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationBin {
    pub lo: f64,
    pub hi: f64,
    /// (row, cluster) pairs whose predicted probability fell in the bin.
    pub count: usize,
    /// Mean predicted probability in the bin.
    pub mean_predicted: f64,
    /// Fraction of those pairs where the cluster was the row's true component.
    pub observed: f64,
}

/// Reliability table of soft assignments against known components: every (row, cluster)
/// pair contributes its responsibility `resp[i·k + j]` as a prediction of the event
/// "row i came from component j", binned into `bins` equal-width bins of [0, 1]. A
/// calibrated assignment has `observed ≈ mean_predicted` in every well-filled bin.
/// `truth[i]` must already be expressed in cluster numbering.
pub fn calibration(resp: &[f64], k: usize, truth: &[u32], bins: usize) -> Vec<CalibrationBin> {
    let mut count = vec![0usize; bins];
    let mut pred = vec![0.0f64; bins];
    let mut hit = vec![0usize; bins];
    for (i, &t) in truth.iter().enumerate() {
        for j in 0..k {
            let r = resp[i * k + j];
            let b = ((r * bins as f64) as usize).min(bins - 1);
            count[b] += 1;
            pred[b] += r;
            if t as usize == j {
                hit[b] += 1;
            }
        }
    }
    (0..bins)
        .map(|b| CalibrationBin {
            lo: b as f64 / bins as f64,
            hi: (b + 1) as f64 / bins as f64,
            count: count[b],
            mean_predicted: if count[b] > 0 {
                pred[b] / count[b] as f64
            } else {
                0.0
            },
            observed: if count[b] > 0 {
                hit[b] as f64 / count[b] as f64
            } else {
                0.0
            },
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn silhouette_of_a_hand_worked_case() {
        // Points 0, 1 in one cluster and 4 in another (one dimension).
        // s(0): a = 1, b = 4 → 0.75; s(1): a = 1, b = 3 → 2/3; s(4): alone → 0.
        let rows = [0.0f32, 1.0, 4.0];
        let s = silhouette(&rows, 1, &[0, 0, 1]).unwrap();
        assert!((s - (0.75 + 2.0 / 3.0) / 3.0).abs() < 1e-12);
        assert_eq!(silhouette(&rows, 1, &[0, 0, 0]), None);
    }

    #[test]
    fn adjusted_rand_index_of_hand_worked_cases() {
        // Same partition under other label numbers: 1.
        assert_eq!(adjusted_rand_index(&[0, 0, 1, 1], &[1, 1, 0, 0]), 1.0);
        // a = {0,1},{2,3}; b = {0,2},{1,3}: no pair agrees. Σ C(n_ij, 2) = 0,
        // Σ C(a_i, 2) = Σ C(b_j, 2) = 2, C(4, 2) = 6: expected 4/6, max 2,
        // ARI = (0 − 2/3) / (2 − 2/3) = −0.5.
        let v = adjusted_rand_index(&[0, 0, 1, 1], &[0, 1, 0, 1]);
        assert!((v + 0.5).abs() < 1e-12, "{v}");
    }

    #[test]
    fn bic_counts_parameters_and_likelihood() {
        // One cluster of N = 4 in one dimension with SSE 4: σ² = 1,
        // ln L = −(4/2)·ln(2π) − 2, p = 2.
        let b = bic(4.0, &[4.0], 1).unwrap();
        let expect = 2.0 * 4f64.ln() + 4.0 * (2.0 * std::f64::consts::PI).ln() + 4.0;
        assert!((b - expect).abs() < 1e-12);
        assert_eq!(bic(0.0, &[4.0], 1), None);
    }

    #[test]
    fn path_fits_are_the_same_whatever_the_range() {
        let rows: Vec<f32> = (0..600).map(|i| ((i * 37) % 113) as f32 * 0.5).collect();
        let data = Dataset::new(&rows, 2, None).unwrap();
        let path = |k_min| KPath {
            k_min,
            k_max: 6,
            seed: 9,
            stop: Stop::exact(100),
            accelerate: true,
            refine: Refine::default(),
            tolerance: 1e-6,
        };
        let mut long = Vec::new();
        k_path(&data, &path(1), |k, r| {
            long.push((k, r.sse));
            true
        });
        let mut short = Vec::new();
        k_path(&data, &path(3), |k, r| {
            short.push((k, r.sse));
            k < 4
        });
        assert_eq!(long.len(), 6);
        assert_eq!(&long[2..4], &short[..]);
    }
}
