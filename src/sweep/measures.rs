//! The measures of every K of a sweep: SSE, ΔE2000, uncertainty, silhouette, mixture BIC
//! and ICL, stability, and the colour families among the fitted colours.

use super::{SweepOptions, SweepRow};
use crate::cluster::{
    auto_beta, bic, fit_mixture, k_path, silhouette, soft_assign, stability, weighted_sample,
    Dataset, KPath, MixtureSettings,
};
use crate::colour::{self, Space};
use crate::features::quality::{entry_delta_e2000, mean_and_p95};

/// Colours of a recommendation closer than this CIEDE2000 are one family: the same
/// distance at which `reduce` chains colour groups into one family.
pub const FAMILY_DELTA_E2000: f64 = 12.0;
/// A colour or class holding less than this share of the pixels is not counted as one of
/// the K (edges, blends between two areas, compression artefacts).
pub const MIN_SHARE: f64 = 0.005;
/// Stability (mean adjusted Rand index) a scene's partition needs to be recommended.
pub const MIN_STABILITY: f64 = 0.9;
/// k-means fits compared per K by the stability criterion (all pairs).
pub const STABILITY_RUNS: usize = 3;

/// Covariance floor of the mixtures, in squared feature units: 0.25 ΔE*ab² in CIELAB (a
/// standard deviation of 0.5, about one 8-bit step of sRGB), the same relative to OKLab's
/// scale (0.25 × 10⁻⁴), and for scenes 10⁻⁴ of the data's mean variance per feature.
pub fn covariance_floor(data: &Dataset, colour: Option<Space>) -> f64 {
    match colour {
        Some(Space::Cielab) => 0.25,
        Some(Space::Oklab) => 0.25e-4,
        None => {
            let d = data.dim();
            let total = data.total_weight();
            let mut mean = vec![0.0f64; d];
            for i in 0..data.len() {
                for (m, &v) in mean.iter_mut().zip(data.row(i)) {
                    *m += data.weight(i) * v as f64;
                }
            }
            mean.iter_mut().for_each(|m| *m /= total);
            let mut var = 0.0;
            for i in 0..data.len() {
                for (m, &v) in mean.iter().zip(data.row(i)) {
                    var += data.weight(i) * (v as f64 - m).powi(2);
                }
            }
            (1e-4 * var / (total * d as f64)).max(1e-12)
        }
    }
}

/// Scores every K of the range on weighted rows. `labs` (CIELAB of each row) turns on
/// the ΔE2000 columns; `total` is the pixel count the weights sum to.
pub fn sweep_rows(
    data: &Dataset,
    labs: Option<&[[f64; 3]]>,
    space: Space,
    opts: &SweepOptions,
) -> Vec<SweepRow> {
    let total = data.total_weight();
    let dim = data.dim();
    let weights: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    // Never more draws than there are pixels (or rows) to draw from.
    let population = data.total_weight().floor().max(2.0) as usize;
    let picks = weighted_sample(
        data,
        opts.silhouette_sample.min(population),
        opts.engine.seed,
    );
    let sample_rows: Vec<f32> = picks.iter().flat_map(|&i| data.row(i).to_vec()).collect();
    let stop = crate::cluster::Stop {
        max_iter: opts.engine.max_iter,
        tolerance: opts.engine.tolerance,
        shift_tolerance: opts.engine.shift_tolerance,
    };
    let mixture = MixtureSettings::new(covariance_floor(data, labs.map(|_| space)));
    let mut rows = Vec::new();
    // Contributor timings (CHROMASIFT_TIMINGS): fits, ΔE2000, soft entropy, silhouette,
    // mixture, stability.
    let mut spent = [0.0f64; 6];
    let mut em_iterations = 0usize;
    let mut clock = std::time::Instant::now();
    let mut lap = |slot: usize, spent: &mut [f64; 6]| {
        spent[slot] += clock.elapsed().as_secs_f64();
        clock = std::time::Instant::now();
    };
    let path = KPath {
        k_min: opts.range.min,
        k_max: opts.range.max,
        seed: opts.engine.seed,
        stop,
        accelerate: true,
        refine: opts.engine.refine,
        tolerance: opts.engine.tolerance,
    };
    k_path(data, &path, |k, res| {
        lap(0, &mut spent);
        let mut cluster_w = vec![0.0f64; k];
        for (l, w) in res.labels.iter().zip(&weights) {
            cluster_w[*l as usize] += w;
        }
        let (mean_de, p95_de, closest, families) = match labs {
            Some(labs) => {
                let de = entry_delta_e2000(&res.means, &res.labels, labs, space);
                let (m, p) = mean_and_p95(&de, &weights, total);
                let (c, f) = colour_families(&res.means, &cluster_w, space);
                (Some(m), Some(p), c, Some(f))
            }
            None => (None, None, None, None),
        };
        lap(1, &mut spent);
        let beta = auto_beta(res.sse, total, dim);
        let soft = soft_assign(data, &res.means, beta);
        let mut unc = 0.0;
        for (h, w) in soft.entropy.iter().zip(&weights) {
            unc += w * *h as f64;
        }
        lap(2, &mut spent);
        let sample_labels: Vec<u32> = picks.iter().map(|&i| res.labels[i]).collect();
        let sil = silhouette(&sample_rows, dim, &sample_labels);
        lap(3, &mut spent);
        let mix = fit_mixture(
            data,
            &res.means,
            &mixture,
            opts.engine.seed ^ ((k as u64) << 32),
        );
        em_iterations += mix.iterations;
        let finite = |v: f64| v.is_finite().then_some(v);
        lap(4, &mut spent);
        let stab = stability(
            data,
            k,
            &sample_rows,
            opts.silhouette_sample,
            STABILITY_RUNS,
            opts.engine.seed,
            stop,
        );
        lap(5, &mut spent);
        rows.push(SweepRow {
            k,
            sse: res.sse,
            mean_delta_e2000: mean_de,
            p95_delta_e2000: p95_de,
            mean_uncertainty: unc / total,
            silhouette: sil,
            bic: bic(res.sse, &cluster_w, dim),
            bic_full: finite(mix.bic()),
            icl: finite(mix.icl()),
            stability: stab,
            closest_delta_e2000: closest,
            families,
            smallest_share: cluster_w.iter().copied().fold(f64::INFINITY, f64::min) / total,
        });
        true
    });
    if crate::trace::enabled() {
        eprintln!(
            "chromasift: timing: sweep over K: fits {:.3} s, ΔE2000 {:.3} s, soft entropy {:.3} s, silhouette {:.3} s, mixture {:.3} s ({em_iterations} EM iterations), stability {:.3} s",
            spent[0], spent[1], spent[2], spent[3], spent[4], spent[5]
        );
    }
    rows
}

/// The closest pair of fitted colours (CIEDE2000; None for one colour) and the number of
/// colour families among them: colours closer than [`FAMILY_DELTA_E2000`] are chained
/// into one family, and families holding less than [`MIN_SHARE`] of `cluster_w` are not
/// counted. Means are `K × 3` in `space`, each taken as the sRGB colour it is drawn with.
fn colour_families(means: &[f64], cluster_w: &[f64], space: Space) -> (Option<f64>, usize) {
    let labs: Vec<[f64; 3]> = means
        .chunks_exact(3)
        .map(|m| colour::srgb8_to_lab(colour::space_to_srgb8([m[0], m[1], m[2]], space)))
        .collect();
    let k = labs.len();
    let mut parent: Vec<usize> = (0..k).collect();
    fn root(p: &mut [usize], mut i: usize) -> usize {
        while p[i] != i {
            p[i] = p[p[i]];
            i = p[i];
        }
        i
    }
    let mut best: Option<f64> = None;
    for i in 0..k {
        for j in i + 1..k {
            let d = colour::delta_e2000(labs[i], labs[j]);
            best = Some(best.map_or(d, |b: f64| b.min(d)));
            if d < FAMILY_DELTA_E2000 {
                let (a, b) = (root(&mut parent, i), root(&mut parent, j));
                parent[a.max(b)] = a.min(b);
            }
        }
    }
    let total: f64 = cluster_w.iter().sum();
    let mut share = vec![0.0f64; k];
    for (i, w) in cluster_w.iter().enumerate() {
        share[root(&mut parent, i)] += w / total;
    }
    (best, share.iter().filter(|&&s| s >= MIN_SHARE).count())
}
