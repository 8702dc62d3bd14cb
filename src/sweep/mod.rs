//! `sweep`: fit every K of a range, score each fit, and recommend one K from the evidence.
//!
//! Per K: the k-means objective (SSE), for colour images the mean and 95th-percentile
//! CIEDE2000 between source and reduced pixels and the closest pair of fitted colours, the
//! mean normalised entropy of the soft assignment at the automatic β, the mean silhouette
//! on a seeded sample (Rousseeuw 1987), the BIC of the matching isotropic Gaussian mixture
//! (Schwarz 1978), the BIC and ICL (Biernacki, Celeux & Govaert 2000) of a full-covariance
//! mixture fitted by EM from the k-means fit, and the stability of the partition across
//! seeded subsamples (after Lange, Roth, Braun & Buhmann 2004). Fits come from one
//! warm-started path ([`crate::cluster::k_path`]), the same path `reduce --target-delta-e`
//! walks, so the two always agree. [`recommend`] weighs the criteria into one K.

use crate::output::DocumentHeader;
use crate::cluster::{
    EngineOptions,
    auto_beta, bic, fit_mixture, k_path, silhouette, soft_assign, stability, weighted_sample,
    Dataset, MixtureSettings,
};
use crate::colour::{self, Space};
use crate::error::{Error, ParamsError, Result};
use crate::features::histogram::{self, IndexedHistogram};
use crate::features::scene::{scene_sample, SceneOptions};
use crate::limits::Limits;
use crate::output::OutputSet;
use crate::raster::{self, Pixels};
use crate::features::quality::{entry_delta_e2000, mean_and_p95};
use crate::features::rows::entry_features;
use crate::output::stem_of;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Output names (exact: other tools read them).
pub const OUTPUT_NAMES: [&str; 3] = ["sweep.csv", "sweep.json", "sweep.svg"];

/// An inclusive range of K, written `A..B` (for example `2..16`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KRange {
    pub min: usize,
    pub max: usize,
}

impl std::str::FromStr for KRange {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let bad = || format!("K range must look like 2..16 (both ends included), got '{s}'");
        let (a, b) = s.trim().split_once("..").ok_or_else(bad)?;
        let b = b.strip_prefix('=').unwrap_or(b);
        let min: usize = a.trim().parse().map_err(|_| bad())?;
        let max: usize = b.trim().parse().map_err(|_| bad())?;
        if min == 0 {
            return Err(format!("K range must start at 1 or more, got '{s}'"));
        }
        if max < min {
            return Err(format!("K range end is below its start in '{s}'"));
        }
        if max > 256 {
            return Err(format!(
                "K range end {max} is above 256, the most a sweep fits"
            ));
        }
        Ok(KRange { min, max })
    }
}

/// Settings of a sweep.
#[derive(Debug, Clone)]
pub struct SweepOptions {
    pub range: KRange,
    /// Clustering space for colour images. Default: CIELAB.
    pub space: Space,
    /// The k-means engine's settings. A sweep fits every K along one warm-started path
    /// (Lloyd from the previous K's means), so it uses the seed, iteration limit and
    /// tolerances; the other settings are reported as ignored.
    pub engine: EngineOptions,
    /// Pixels drawn (seeded, in proportion to their count) for the silhouette, which
    /// costs O(n²). Default: 2000.
    pub silhouette_sample: usize,
    pub limits: Limits,
    /// Multi-band scene settings (bands, indices, scaling, nodata, fitting sample): when
    /// set, the input is read as a raster scene as `landcover` reads it.
    pub scene: Option<SceneOptions>,
}

impl SweepOptions {
    /// Defaults for a range.
    pub fn new(range: KRange) -> Self {
        SweepOptions {
            range,
            space: Space::Cielab,
            engine: EngineOptions::default(),
            silhouette_sample: 2000,
            limits: Limits::default(),
            scene: None,
        }
    }
}

/// One K of a sweep. ΔE fields are null for multi-band scenes; silhouette, stability and
/// the closest pair are null at K = 1, the spherical BIC when the SSE is zero.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepRow {
    pub k: usize,
    pub sse: f64,
    pub mean_delta_e2000: Option<f64>,
    pub p95_delta_e2000: Option<f64>,
    pub mean_uncertainty: f64,
    pub silhouette: Option<f64>,
    /// BIC of the isotropic mixture matching the k-means fit (one shared variance).
    pub bic: Option<f64>,
    /// BIC of the full-covariance Gaussian mixture fitted by EM from the k-means fit.
    #[serde(default)]
    pub bic_full: Option<f64>,
    /// ICL of that mixture (Biernacki, Celeux & Govaert 2000).
    #[serde(default)]
    pub icl: Option<f64>,
    /// Mean adjusted Rand index between k-means fits on seeded subsamples (1 = the same
    /// partition every time).
    #[serde(default)]
    pub stability: Option<f64>,
    /// Smallest CIEDE2000 between two of the K fitted colours (colour images).
    #[serde(default)]
    pub closest_delta_e2000: Option<f64>,
    /// Share of the pixels (or rows) in the smallest cluster, 0..1.
    #[serde(default)]
    pub smallest_share: f64,
    /// Colour families among the K fitted colours (colour images): colours closer than
    /// [`FAMILY_DELTA_E2000`] chained into one, families under [`MIN_SHARE`] of the
    /// pixels not counted.
    #[serde(default)]
    pub families: Option<usize>,
}

/// The one K a sweep recommends, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Recommendation {
    pub k: usize,
    /// "distinct colours" (colour images), "stable classes" (multi-band scenes), or
    /// "criteria" when no K of the range passes the rule and the ICL's choice stands.
    pub rule: String,
    /// Why this K, in words, with the numbers that decided it.
    pub reason: String,
    /// Criteria whose own suggestion equals `k`.
    pub agreeing: Vec<String>,
    /// "3 of 5 criteria agree (…)" with the others' choices.
    pub agreement: String,
}

/// `sweep.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepDocument {
    /// Tool version, input, seed and every engine setting.
    #[serde(flatten)]
    pub header: DocumentHeader,
    /// What was clustered: "cielab", "oklab", or the scene's feature names.
    pub features: String,
    pub silhouette_sample: usize,
    /// Diagonal floor added to every mixture covariance, in squared feature units.
    #[serde(default)]
    pub covariance_floor: f64,
    pub rows: Vec<SweepRow>,
    /// K suggested by each criterion on its own: "silhouette" (largest mean silhouette),
    /// "bic" (lowest spherical BIC), "bic_full" and "icl" (lowest), "stability" (the
    /// largest K within 0.02 of the best stability); ties go to the smaller K.
    pub suggested: BTreeMap<String, usize>,
    /// The recommended K.
    #[serde(default)]
    pub recommended: Option<Recommendation>,
}

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
    let picks = weighted_sample(data, opts.silhouette_sample.min(population), opts.engine.seed);
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
    k_path(
        data,
        opts.range.min,
        opts.range.max,
        opts.engine.seed,
        stop,
        true,
        |k, res| {
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
            let mix = fit_mixture(data, &res.means, &mixture, opts.engine.seed ^ ((k as u64) << 32));
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
        },
    );
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

/// The K each criterion suggests.
pub fn suggest(rows: &[SweepRow]) -> BTreeMap<String, usize> {
    let mut out = BTreeMap::new();
    let best = |key: &dyn Fn(&SweepRow) -> Option<f64>, higher: bool| {
        let mut b: Option<(f64, usize)> = None;
        for r in rows {
            if let Some(v) = key(r) {
                let better = match b {
                    None => true,
                    Some((bv, _)) => {
                        if higher {
                            v > bv
                        } else {
                            v < bv
                        }
                    }
                };
                if better {
                    b = Some((v, r.k));
                }
            }
        }
        b
    };
    if let Some((_, k)) = best(&|r| r.silhouette, true) {
        out.insert("silhouette".to_string(), k);
    }
    if let Some((_, k)) = best(&|r| r.bic, false) {
        out.insert("bic".to_string(), k);
    }
    if let Some((_, k)) = best(&|r| r.bic_full, false) {
        out.insert("bic_full".to_string(), k);
    }
    if let Some((_, k)) = best(&|r| r.icl, false) {
        out.insert("icl".to_string(), k);
    }
    // Stability is near 1 for every K that splits the data the same way each time: the
    // largest such K is the finest partition the data supports.
    if let Some((top, _)) = best(&|r| r.stability, true) {
        if let Some(r) = rows
            .iter()
            .rev()
            .find(|r| r.stability.is_some_and(|s| s >= top - 0.02))
        {
            out.insert("stability".to_string(), r.k);
        }
    }
    out
}

/// The recommended K and the reason for it.
///
/// Colour images ("distinct colours"): at every K up to the full-covariance BIC's or the
/// ICL's choice (whichever is larger), count the colour families among the fitted colours
/// (colours closer than [`FAMILY_DELTA_E2000`] chained into one, families under
/// [`MIN_SHARE`] of the pixels left out); the recommendation is the most families any of
/// those K shows. Past the number of families, k-means splits a family into near-identical
/// colours, which chain back into one, even where the likelihood keeps rising; and a K
/// where k-means split one broad family instead of separating two close ones still counts
/// the families it did find. Multi-band scenes ("stable classes"): the largest K up to the
/// same bound whose partition is stable (at least [`MIN_STABILITY`]) and whose smallest
/// class holds at least [`MIN_SHARE`]. When nothing passes, the ICL's choice.
pub fn recommend(rows: &[SweepRow], suggested: &BTreeMap<String, usize>) -> Option<Recommendation> {
    let first = rows.first()?;
    let colour_image = first.mean_delta_e2000.is_some();
    let last_k = rows.last().map_or(first.k, |r| r.k);
    let upper = match (suggested.get("bic_full"), suggested.get("icl")) {
        (None, None) => last_k,
        (a, b) => *a.max(b).expect("one is set"),
    };
    let bound = format!(
        "up to K = {upper} (the larger of the full-covariance BIC's and the ICL's choices)"
    );
    let fallback = || {
        let k = suggested
            .get("icl")
            .or(suggested.get("bic_full"))
            .copied()
            .unwrap_or(first.k);
        (
            k,
            "criteria",
            format!("No K of the range passes the rule; the ICL's choice, K = {k}, stands."),
        )
    };
    let (k, rule, reason) = if colour_image {
        // The most families, first seen at the smallest K.
        let mut most: Option<(usize, &SweepRow)> = None;
        for r in rows.iter().filter(|r| r.k <= upper) {
            let f = r.families.unwrap_or(0);
            if f > 0 && most.is_none_or(|(m, _)| f > m) {
                most = Some((f, r));
            }
        }
        match most {
            Some((f, r)) => {
                let how = if f == r.k {
                    format!(
                        "at K = {} every fitted colour is at least ΔE2000 {FAMILY_DELTA_E2000} from the others{}",
                        r.k,
                        r.closest_delta_e2000
                            .map_or(String::new(), |d| format!(" (closest pair {d:.1})"))
                    )
                } else {
                    format!(
                        "the {} fitted colours at K = {} form {f} families of colours within ΔE2000 {FAMILY_DELTA_E2000} of each other",
                        r.k, r.k
                    )
                };
                let mut more: Vec<String> = rows
                    .iter()
                    .filter(|o| o.k > r.k && o.k <= upper)
                    .map(|o| format!("{} at K = {}", o.families.unwrap_or(0), o.k))
                    .collect();
                if more.len() > 4 {
                    more.truncate(4);
                    more.push("…".into());
                }
                (
                    f,
                    "distinct colours",
                    format!(
                        "{f} colour families: {how}, and no K {bound} shows more{}. Colours closer than ΔE2000 {FAMILY_DELTA_E2000} count as one family; families under {:.1} % of the pixels are not counted.",
                        if more.is_empty() {
                            String::new()
                        } else {
                            format!(" (larger K split a family into near-identical colours: {} families)", more.join(", "))
                        },
                        100.0 * MIN_SHARE
                    ),
                )
            }
            None => fallback(),
        }
    } else {
        let passes = |r: &SweepRow| {
            r.k <= upper
                && (r.k == 1 || r.stability.is_some_and(|s| s >= MIN_STABILITY))
                && r.smallest_share >= MIN_SHARE
        };
        match rows.iter().rfind(|r| passes(r)) {
            Some(r) => {
                let mut reason = format!(
                    "K = {} is the largest K {bound} whose partition is stable across subsamples (adjusted Rand index {} ≥ {MIN_STABILITY}) and whose smallest class holds at least {:.1} % of the pixels ({:.1} %).",
                    r.k,
                    r.stability.map_or("n/a".into(), |s| format!("{s:.3}")),
                    100.0 * MIN_SHARE,
                    100.0 * r.smallest_share
                );
                if let Some(next) = rows.iter().find(|o| o.k == r.k + 1) {
                    let why = if next.k > upper {
                        format!("it is above the mixture criteria's K = {upper}")
                    } else if next.smallest_share < MIN_SHARE {
                        format!(
                            "its smallest class holds only {:.2} % of the pixels",
                            100.0 * next.smallest_share
                        )
                    } else {
                        format!(
                            "its partition changes from subsample to subsample (adjusted Rand index {:.3})",
                            next.stability.unwrap_or(f64::NAN)
                        )
                    };
                    reason.push_str(&format!(" Not K = {}: {why}.", next.k));
                }
                (r.k, "stable classes", reason)
            }
            None => fallback(),
        }
    };
    let agreeing: Vec<String> = suggested
        .iter()
        .filter(|(_, &v)| v == k)
        .map(|(n, _)| n.clone())
        .collect();
    let others: Vec<String> = suggested
        .iter()
        .filter(|(_, &v)| v != k)
        .map(|(n, v)| format!("{n} {v}"))
        .collect();
    let mut agreement = format!(
        "{} of {} criteria agree ({})",
        agreeing.len(),
        suggested.len(),
        if agreeing.is_empty() {
            "none".to_string()
        } else {
            agreeing.join(", ")
        }
    );
    if !others.is_empty() {
        agreement.push_str(&format!("; the others suggest {}", others.join(", ")));
    }
    Some(Recommendation {
        k,
        rule: rule.to_string(),
        reason,
        agreeing,
        agreement,
    })
}

/// What [`sweep_file`] did.
#[derive(Debug, Clone)]
pub struct SweepReport {
    pub outputs: Vec<PathBuf>,
    pub document: SweepDocument,
    pub notes: Vec<String>,
    pub seconds: f64,
}

/// True when the file should be read as a multi-band scene rather than a colour image:
/// asked for (`scene` options with bands or indices), or a TIFF that is georeferenced,
/// has more than four bands, or floating-point or signed samples.
fn is_scene(input: &Path, opts: &SweepOptions) -> Result<bool> {
    if let Some(s) = &opts.scene {
        if s.bands.is_some() || !s.indices.is_empty() {
            return Ok(true);
        }
    }
    let ext = input
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if !matches!(ext.as_deref(), Some("tif") | Some("tiff")) {
        return Ok(false);
    }
    let r = crate::raster::geotiff::GeoRaster::open(input, &opts.limits)?;
    let info = r.info();
    Ok(!info.geo.is_empty()
        || info.bands > 4
        || !matches!(
            info.sample,
            crate::raster::geotiff::SampleKind::U8 | crate::raster::geotiff::SampleKind::U16
        ))
}

/// Largest silhouette sample accepted (the silhouette takes time in its square).
pub const MAX_SILHOUETTE_SAMPLE: usize = 50_000;

/// Runs a sweep on a file and writes `sweep.csv`, `sweep.json` and `sweep.svg` into
/// `out_dir` atomically.
pub fn sweep_file(input: &Path, out_dir: &Path, opts: &SweepOptions) -> Result<SweepReport> {
    let t0 = Instant::now();
    // The silhouette costs the square of the sample: bound it before anything is drawn.
    if !(2..=MAX_SILHOUETTE_SAMPLE).contains(&opts.silhouette_sample) {
        return Err(ParamsError::Other(format!(
            "`silhouette_sample` must be between 2 and {MAX_SILHOUETTE_SAMPLE} (got {})",
            opts.silhouette_sample
        ))
        .into());
    }
    opts.engine.params(opts.range.max).check()?;
    stem_of(input)?;
    let mut set = OutputSet::prepare(out_dir, &[input])?;
    for n in OUTPUT_NAMES {
        set.check_target(n)?;
    }
    let mut notes = Vec::new();
    let ignored: Vec<String> = opts
        .engine
        .changed()
        .into_iter()
        .filter(|n| !matches!(*n, "seed" | "max_iter" | "tolerance" | "shift_tolerance"))
        .map(|n| format!("`{n}`"))
        .collect();
    if !ignored.is_empty() {
        notes.push(format!(
            "a sweep fits every K along one warm-started path of Lloyd iterations, so {} \
             have no effect here",
            ignored.join(", ")
        ));
    }
    let (rows, features, floor) = if is_scene(input, opts)? {
        let scene_opts = opts.scene.clone().unwrap_or_default();
        let s = scene_sample(input, &scene_opts, opts.engine.seed, &opts.limits, opts.range.min)?;
        let data = Dataset::new(&s.sample, s.dim, None)?;
        let rows = sweep_rows(&data, None, opts.space, opts);
        (
            rows,
            format!("bands/indices {}", s.feature_names().join(",")),
            covariance_floor(&data, None),
        )
    } else {
        let img = raster::decode(input, &opts.limits)?;
        let IndexedHistogram { histogram: h, .. } = match &img.pixels {
            Pixels::Rgba8(p) => histogram::from_rgba8(p),
            Pixels::Rgba16(p) => histogram::from_rgba16(p),
        };
        drop(img);
        if h.is_empty() {
            return Err(Error::InputData {
                path: input.into(),
                message: "every pixel is fully transparent; there is nothing to sweep".into(),
            });
        }
        let weights = h.weights();
        let (feat, labs) = entry_features(&h, opts.space);
        let data = Dataset::new(&feat, 3, Some(&weights))?;
        let rows = sweep_rows(&data, Some(&labs), opts.space, opts);
        (
            rows,
            opts.space.name().to_string(),
            covariance_floor(&data, Some(opts.space)),
        )
    };
    let last = rows.last().map_or(0, |r| r.k);
    if last < opts.range.max {
        notes.push(format!(
            "the data has only {last} distinct values to cluster; the sweep stops at K = {last}"
        ));
    }
    if rows.is_empty() {
        return Err(Error::InputData {
            path: input.into(),
            message: format!(
                "fewer distinct colours or values than K = {}; nothing to sweep",
                opts.range.min
            ),
        });
    }
    let suggested = suggest(&rows);
    let document = SweepDocument {
        header: DocumentHeader::new(
            input.file_name().map(|n| n.to_string_lossy().into_owned()),
            opts.engine,
        ),
        features,
        silhouette_sample: opts.silhouette_sample,
        covariance_floor: floor,
        recommended: recommend(&rows, &suggested),
        suggested,
        rows,
    };
    set.write_bytes(OUTPUT_NAMES[0], sweep_csv(&document).as_bytes())?;
    let json = serde_json::to_string_pretty(&document).expect("sweep document serialises");
    set.write_bytes(OUTPUT_NAMES[1], format!("{json}\n").as_bytes())?;
    set.write_bytes(OUTPUT_NAMES[2], sweep_svg(&document, opts.space).as_bytes())?;
    let outputs = set.commit()?;
    Ok(SweepReport {
        outputs,
        document,
        notes,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

fn opt(v: Option<f64>) -> String {
    v.map_or(String::new(), |v| format!("{v}"))
}

/// `sweep.csv`: one row per K with a header, then a `# suggested` comment line per
/// criterion and a `# recommended` line.
pub fn sweep_csv(doc: &SweepDocument) -> String {
    let mut s = String::from(
        "k,sse,mean_delta_e2000,p95_delta_e2000,mean_uncertainty,silhouette,bic,bic_full,icl,stability,closest_delta_e2000,smallest_share,families\n",
    );
    for r in &doc.rows {
        s.push_str(&format!(
            "{},{},{},{},{},{},{},{},{},{},{},{},{}\n",
            r.k,
            r.sse,
            opt(r.mean_delta_e2000),
            opt(r.p95_delta_e2000),
            r.mean_uncertainty,
            opt(r.silhouette),
            opt(r.bic),
            opt(r.bic_full),
            opt(r.icl),
            opt(r.stability),
            opt(r.closest_delta_e2000),
            r.smallest_share,
            r.families.map_or(String::new(), |f| f.to_string())
        ));
    }
    for (name, k) in &doc.suggested {
        s.push_str(&format!("# suggested by {name}: K = {k}\n"));
    }
    if let Some(r) = &doc.recommended {
        s.push_str(&format!(
            "# recommended: K = {} ({}): {}\n",
            r.k, r.rule, r.reason
        ));
    }
    s
}

/// About `n` round tick values covering [lo, hi].
fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi.is_nan() || lo.is_nan() || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut v = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while v <= hi + step * 1e-9 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    out
}

fn label(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{v:.1e}")
    } else if a >= 100.0 || v.fract() == 0.0 {
        format!("{v:.0}")
    } else {
        let s = format!("{v:.3}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// Width of `text` at `size` px, estimated at 0.6 em per character (wider than the
/// average sans-serif glyph, so the estimate errs on the side of room).
fn text_width(text: &str, size: f64) -> f64 {
    0.6 * size * text.chars().count() as f64
}

/// A text's box on the canvas, for the layout checks.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TextBox {
    pub text: String,
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

/// What the chart drew, in canvas coordinates: every label's box and every curve.
#[derive(Debug, Default)]
pub(crate) struct Layout {
    pub texts: Vec<TextBox>,
    pub curves: Vec<Vec<(f64, f64)>>,
}

/// The SVG being written and the layout of what it holds.
struct Canvas {
    svg: String,
    layout: Layout,
}

impl Canvas {
    /// A text at baseline `y`, anchored at `x` ("start", "middle" or "end").
    #[allow(clippy::too_many_arguments)]
    fn text(&mut self, x: f64, y: f64, size: f64, anchor: &str, style: &str, text: &str) {
        let w = text_width(text, size);
        let x0 = match anchor {
            "end" => x - w,
            "middle" => x - w / 2.0,
            _ => x,
        };
        self.layout.texts.push(TextBox {
            text: text.to_string(),
            x0,
            y0: y - 0.8 * size,
            x1: x0 + w,
            y1: y + 0.2 * size,
        });
        self.svg.push_str(&format!(
            "<text x=\"{x:.1}\" y=\"{y:.1}\" font-size=\"{size}\" text-anchor=\"{anchor}\"{}>{}</text>\n",
            if style.is_empty() {
                String::new()
            } else {
                format!(" style=\"{style}\"")
            },
            escape(text)
        ));
    }
}

/// One line of a panel.
struct Series<'a> {
    name: String,
    colour: &'a str,
    values: Vec<(usize, f64)>,
    dashed: bool,
    /// The K this criterion suggests on its own: ringed on the curve.
    best: Option<usize>,
}

const PANEL_W: f64 = 400.0;
const PANEL_H: f64 = 250.0;

/// One plot panel with its top-left corner at (x0, y0): title, a legend row (with the
/// recommended K) above the frame, the curves inside it, guide labels in the right margin.
#[allow(clippy::too_many_arguments)]
fn panel(
    c: &mut Canvas,
    x0: f64,
    y0: f64,
    title: &str,
    y_unit: &str,
    ks: (usize, usize),
    series: &[Series],
    recommended: Option<usize>,
    guides: &[(f64, &str)],
) {
    let (l, r, t, b) = (62.0, 34.0, 62.0, 40.0);
    let (pw, ph) = (PANEL_W - l - r, PANEL_H - t - b);
    let (fl, ft) = (x0 + l, y0 + t);
    c.text(
        x0 + 10.0,
        y0 + 18.0,
        13.0,
        "start",
        "font-weight:bold",
        title,
    );
    let vals: Vec<f64> = series
        .iter()
        .flat_map(|s| s.values.iter().map(|v| v.1))
        .chain(guides.iter().map(|g| g.0))
        .filter(|v| v.is_finite())
        .collect();
    if vals.is_empty() || series.iter().all(|s| s.values.is_empty()) {
        c.text(
            fl + 10.0,
            ft + ph / 2.0,
            12.0,
            "start",
            "fill:#666",
            "not defined for this input",
        );
        return;
    }
    // Legend: entries left to right over two rows, the recommended K right-aligned last.
    let mut lx = fl;
    let mut row = 0;
    let rows_y = [y0 + 36.0, y0 + 51.0];
    let right = fl + pw;
    let mut items: Vec<(Option<&Series>, String)> = series
        .iter()
        .map(|s| {
            let name = match s.best {
                Some(k) => format!("{} (suggests {k})", s.name),
                None => s.name.clone(),
            };
            (Some(s), name)
        })
        .collect();
    if let Some(k) = recommended {
        items.push((None, format!("recommended K = {k}")));
    }
    for (s, name) in &items {
        let w = text_width(name, 10.0) + if s.is_some() { 22.0 } else { 0.0 };
        if lx + w > right && lx > fl {
            row = (row + 1).min(1);
            lx = fl;
        }
        let y = rows_y[row];
        match s {
            Some(s) => {
                c.svg.push_str(&format!(
                    "<line x1=\"{lx:.1}\" x2=\"{:.1}\" y1=\"{:.1}\" y2=\"{:.1}\" stroke=\"{}\" stroke-width=\"2\"{}/>\n",
                    lx + 18.0,
                    y - 3.5,
                    y - 3.5,
                    s.colour,
                    if s.dashed { " stroke-dasharray=\"5,3\"" } else { "" }
                ));
                c.text(lx + 22.0, y, 10.0, "start", "", name);
            }
            None => {
                // The recommendation goes to the right end of the row.
                let x = if right - w >= lx { right } else { lx + w };
                c.text(x, y, 10.0, "end", "fill:#c0392b;font-weight:bold", name);
            }
        }
        lx += w + 12.0;
    }
    let (mut lo, mut hi) = vals
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if hi - lo < 1e-12 * hi.abs().max(1.0) {
        lo -= 0.5 * lo.abs().max(1.0);
        hi += 0.5 * hi.abs().max(1.0);
    }
    let pad = 0.06 * (hi - lo);
    let (lo, hi) = (lo - pad, hi + pad);
    let xs = |k: usize| {
        if ks.1 == ks.0 {
            fl + pw / 2.0
        } else {
            fl + pw * (k - ks.0) as f64 / (ks.1 - ks.0) as f64
        }
    };
    let ys = |v: f64| ft + ph * (1.0 - (v - lo) / (hi - lo));
    c.svg.push_str(&format!(
        "<rect x=\"{fl}\" y=\"{ft}\" width=\"{pw}\" height=\"{ph}\" fill=\"none\" stroke=\"#333\"/>\n"
    ));
    for v in ticks(lo, hi, 4) {
        let y = ys(v);
        c.svg.push_str(&format!(
            "<line x1=\"{fl}\" x2=\"{:.1}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#ddd\"/>\n",
            fl + pw
        ));
        c.text(fl - 5.0, y + 3.5, 10.0, "end", "", &label(v));
    }
    let step = ((ks.1 - ks.0) / 12).max(1);
    for k in (ks.0..=ks.1).step_by(step) {
        c.text(xs(k), ft + ph + 14.0, 10.0, "middle", "", &k.to_string());
    }
    c.text(
        fl + pw / 2.0,
        ft + ph + 31.0,
        11.0,
        "middle",
        "",
        "K (colours or classes)",
    );
    // The y-axis name, rotated: its box is tall and narrow.
    let w = text_width(y_unit, 11.0);
    c.layout.texts.push(TextBox {
        text: y_unit.to_string(),
        x0: x0 + 5.0,
        y0: ft + ph / 2.0 - w / 2.0,
        x1: x0 + 16.0,
        y1: ft + ph / 2.0 + w / 2.0,
    });
    c.svg.push_str(&format!(
        "<text transform=\"translate({:.1},{:.1}) rotate(-90)\" font-size=\"11\" text-anchor=\"middle\">{}</text>\n",
        x0 + 14.0,
        ft + ph / 2.0,
        escape(y_unit)
    ));
    // Guides: dotted lines across the frame, labels in the right margin, pushed apart.
    let mut gl: Vec<(f64, &str)> = Vec::new();
    for (v, name) in guides {
        if *v >= lo && *v <= hi {
            let y = ys(*v);
            c.svg.push_str(&format!(
                "<line x1=\"{fl}\" x2=\"{:.1}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#888\" stroke-dasharray=\"2,3\"/>\n",
                fl + pw
            ));
            gl.push((y + 3.0, name));
        }
    }
    gl.sort_by(|a, b| a.0.total_cmp(&b.0));
    for i in 1..gl.len() {
        if gl[i].0 < gl[i - 1].0 + 11.0 {
            gl[i].0 = gl[i - 1].0 + 11.0;
        }
    }
    for (y, name) in gl {
        c.text(fl + pw + 4.0, y, 9.0, "start", "fill:#666", name);
    }
    if let Some(k) = recommended {
        let x = xs(k);
        c.svg.push_str(&format!(
            "<line x1=\"{x:.1}\" x2=\"{x:.1}\" y1=\"{ft}\" y2=\"{:.1}\" stroke=\"#c0392b\" stroke-width=\"1.5\" stroke-dasharray=\"4,3\"/>\n",
            ft + ph
        ));
    }
    for s in series {
        let pts: Vec<(f64, f64)> = s
            .values
            .iter()
            .filter(|v| v.1.is_finite())
            .map(|&(k, v)| (xs(k), ys(v)))
            .collect();
        let text: Vec<String> = pts.iter().map(|(x, y)| format!("{x:.1},{y:.1}")).collect();
        c.svg.push_str(&format!(
            "<polyline points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"2\"{}/>\n",
            text.join(" "),
            s.colour,
            if s.dashed {
                " stroke-dasharray=\"5,3\""
            } else {
                ""
            }
        ));
        for (x, y) in &pts {
            c.svg.push_str(&format!(
                "<circle cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"2.5\" fill=\"{}\"/>\n",
                s.colour
            ));
        }
        if let Some(k) = s.best {
            if let Some(&(_, v)) = s.values.iter().find(|v| v.0 == k) {
                c.svg.push_str(&format!(
                    "<circle cx=\"{:.1}\" cy=\"{:.1}\" r=\"6\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.5\"/>\n",
                    xs(k),
                    ys(v),
                    s.colour
                ));
            }
        }
        c.layout.curves.push(pts);
    }
}

/// Splits `text` into lines of at most `width` characters at spaces.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// `sweep.svg`: one panel per measure against K, each criterion's own choice ringed on its
/// curve, the recommended K marked in every panel and explained below them.
pub fn sweep_svg(doc: &SweepDocument, space: Space) -> String {
    render_svg(doc, space).svg
}

fn render_svg(doc: &SweepDocument, space: Space) -> Canvas {
    let ks = (
        doc.rows.first().map_or(1, |r| r.k),
        doc.rows.last().map_or(1, |r| r.k),
    );
    let col = |f: &dyn Fn(&SweepRow) -> Option<f64>| -> Vec<(usize, f64)> {
        doc.rows
            .iter()
            .filter_map(|r| f(r).map(|v| (r.k, v)))
            .collect()
    };
    let colour_image = doc.rows.iter().any(|r| r.mean_delta_e2000.is_some());
    let sse_unit = if colour_image {
        match space {
            Space::Cielab => "SSE (ΔE*ab²)",
            Space::Oklab => "SSE (OKLab units²)",
        }
    } else {
        "SSE (scaled units²)"
    };
    let best = |name: &str| doc.suggested.get(name).copied();
    let rec = doc.recommended.as_ref().map(|r| r.k);
    let series = |name: &str, colour: &'static str, values, dashed, best| Series {
        name: name.to_string(),
        colour,
        values,
        dashed,
        best,
    };
    let (width, height) = (820.0, 1290.0);
    let mut c = Canvas {
        svg: format!(
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{width}\" height=\"{height}\" viewBox=\"0 0 {width} {height}\" font-family=\"sans-serif\">\n<rect width=\"{width}\" height=\"{height}\" fill=\"white\"/>\n"
        ),
        layout: Layout::default(),
    };
    let heading = format!(
        "chromasift sweep: {}  (K {}..{}, {})",
        doc.header.input.as_deref().unwrap_or("input"),
        ks.0,
        ks.1,
        doc.features
    );
    c.text(10.0, 22.0, 15.0, "start", "font-weight:bold", &heading);
    let top = 34.0;
    let at = |i: usize| {
        (
            if i % 2 == 0 { 0.0 } else { 410.0 },
            top + PANEL_H * (i / 2) as f64,
        )
    };
    let p = at(0);
    panel(
        &mut c,
        p.0,
        p.1,
        "Colour difference, source vs reduced",
        "ΔE2000",
        ks,
        &[
            series("mean", "#1f77b4", col(&|r| r.mean_delta_e2000), false, None),
            series(
                "95th percentile",
                "#ff7f0e",
                col(&|r| r.p95_delta_e2000),
                true,
                None,
            ),
        ],
        rec,
        &[(1.0, "1*"), (3.0, "3*")],
    );
    let p = at(1);
    panel(
        &mut c,
        p.0,
        p.1,
        "k-means objective, summed over pixels",
        sse_unit,
        ks,
        &[series("SSE", "#2ca02c", col(&|r| Some(r.sse)), false, None)],
        rec,
        &[],
    );
    let p = at(2);
    panel(
        &mut c,
        p.0,
        p.1,
        "Mean silhouette (higher is better)",
        "silhouette (−1..1)",
        ks,
        &[series(
            "silhouette",
            "#9467bd",
            col(&|r| r.silhouette),
            false,
            best("silhouette"),
        )],
        rec,
        &[],
    );
    let p = at(3);
    panel(
        &mut c,
        p.0,
        p.1,
        "Stability across subsamples (higher: stabler)",
        "adjusted Rand index",
        ks,
        &[series(
            "stability",
            "#e377c2",
            col(&|r| r.stability),
            false,
            best("stability"),
        )],
        rec,
        &[],
    );
    let p = at(4);
    panel(
        &mut c,
        p.0,
        p.1,
        "BIC, one shared spherical variance",
        "BIC",
        ks,
        &[series(
            "BIC spherical",
            "#8c564b",
            col(&|r| r.bic),
            false,
            best("bic"),
        )],
        rec,
        &[],
    );
    let p = at(5);
    panel(
        &mut c,
        p.0,
        p.1,
        "BIC and ICL, full covariances (lower is better)",
        "criterion",
        ks,
        &[
            series(
                "BIC full",
                "#d62728",
                col(&|r| r.bic_full),
                false,
                best("bic_full"),
            ),
            series("ICL", "#7f7f7f", col(&|r| r.icl), true, best("icl")),
        ],
        rec,
        &[],
    );
    let p = at(6);
    panel(
        &mut c,
        p.0,
        p.1,
        "Mean uncertainty of the soft assignment",
        "entropy / ln K (0 = certain)",
        ks,
        &[series(
            "uncertainty",
            "#17becf",
            col(&|r| Some(r.mean_uncertainty)),
            false,
            None,
        )],
        rec,
        &[],
    );
    let p = at(7);
    let family = format!("{FAMILY_DELTA_E2000}");
    panel(
        &mut c,
        p.0,
        p.1,
        "Closest pair of fitted colours",
        "ΔE2000",
        ks,
        &[series(
            "closest pair",
            "#bcbd22",
            col(&|r| r.closest_delta_e2000),
            false,
            None,
        )],
        rec,
        &[(FAMILY_DELTA_E2000, family.as_str())],
    );
    // Notes under the panels.
    let mut y = top + 4.0 * PANEL_H + 20.0;
    let mut note = |c: &mut Canvas, text: &str, style: &str| {
        for line in wrap(text, 118) {
            c.text(10.0, y, 11.0, "start", style, &line);
            y += 15.0;
        }
    };
    if let Some(r) = &doc.recommended {
        note(
            &mut c,
            &format!("Recommended K = {} (rule: {}). {}", r.k, r.rule, r.reason),
            "font-weight:bold;fill:#c0392b",
        );
        note(&mut c, &format!("Agreement: {}.", r.agreement), "");
    }
    note(
        &mut c,
        &format!(
            "Silhouette: Rousseeuw (1987), on a seeded sample of {} pixels or rows. Stability: mean adjusted Rand index between {STABILITY_RUNS} k-means fits on seeded subsamples (after Lange, Roth, Braun & Buhmann 2004). Rings mark the K each criterion suggested on its own.",
            doc.silhouette_sample
        ),
        "",
    );
    note(
        &mut c,
        &format!(
            "BIC: Schwarz (1978). Spherical: one shared variance, which on images keeps favouring more colours. Full: Gaussian mixture with a covariance per cluster, fitted by EM from the k-means fit (covariance floor {}); ICL: Biernacki, Celeux & Govaert (2000).",
            label(doc.covariance_floor)
        ),
        "",
    );
    if colour_image {
        note(
            &mut c,
            &format!("* Dotted grey lines on the ΔE panel: ΔE2000 1 and 3 are rules of thumb (noticeable; print tolerance), common practice, not a standard. On the closest-pair panel: ΔE2000 {FAMILY_DELTA_E2000}, closer colours are one family."),
            "",
        );
    }
    c.svg.push_str("</svg>\n");
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn k_ranges_parse_and_refuse() {
        assert_eq!(
            "2..16".parse::<KRange>().unwrap(),
            KRange { min: 2, max: 16 }
        );
        assert_eq!(
            "3..=5".parse::<KRange>().unwrap(),
            KRange { min: 3, max: 5 }
        );
        assert_eq!("4..4".parse::<KRange>().unwrap(), KRange { min: 4, max: 4 });
        for bad in ["", "2", "0..4", "5..3", "a..b", "2..1000", "2...5"] {
            assert!(bad.parse::<KRange>().is_err(), "{bad}");
        }
    }

    #[test]
    fn ticks_are_round_and_cover_the_range() {
        let t = ticks(0.13, 0.87, 4);
        let want = [0.2, 0.4, 0.6, 0.8];
        assert_eq!(t.len(), want.len());
        for (a, b) in t.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{t:?}");
        }
        assert!(ticks(5.0, 5.0, 4).len() == 1);
    }

    #[test]
    fn suggestions_take_the_best_and_the_smaller_k_on_ties() {
        let row = |k, s, b| SweepRow {
            k,
            sse: 1.0,
            mean_delta_e2000: None,
            p95_delta_e2000: None,
            mean_uncertainty: 0.0,
            silhouette: s,
            bic: b,
            bic_full: None,
            icl: None,
            stability: None,
            closest_delta_e2000: None,
            smallest_share: 0.1,
            families: None,
        };
        let rows = vec![
            row(1, None, Some(10.0)),
            row(2, Some(0.5), Some(4.0)),
            row(3, Some(0.7), Some(4.0)),
            row(4, Some(0.7), Some(6.0)),
        ];
        let s = suggest(&rows);
        assert_eq!(s["silhouette"], 3);
        assert_eq!(s["bic"], 2);
    }

    fn row(k: usize) -> SweepRow {
        SweepRow {
            k,
            sse: 1000.0 / k as f64,
            mean_delta_e2000: Some(20.0 / k as f64),
            p95_delta_e2000: Some(35.0 / k as f64),
            mean_uncertainty: 0.1,
            silhouette: Some(0.5),
            bic: Some(100.0 - k as f64),
            bic_full: Some(90.0 - k as f64),
            icl: Some(95.0 - k as f64),
            stability: (k > 1).then_some(1.0),
            closest_delta_e2000: (k > 1).then_some(if k <= 5 { 20.0 } else { 2.0 }),
            smallest_share: 0.05,
            families: Some(k.min(5)),
        }
    }

    #[test]
    fn recommendation_counts_colour_families_and_stable_classes() {
        // Every criterion keeps improving up to K = 8, but from K = 6 the extra colours
        // chain into existing families: five families.
        let rows: Vec<SweepRow> = (1..=8).map(row).collect();
        let s = suggest(&rows);
        assert_eq!(s["bic_full"], 8);
        let r = recommend(&rows, &s).unwrap();
        assert_eq!((r.k, r.rule.as_str()), (5, "distinct colours"));
        assert!(r.reason.starts_with("5 colour families"), "{}", r.reason);
        // A K where one more family shows (k-means separated two close ones there).
        let mut more = rows.clone();
        more[6].families = Some(6);
        assert_eq!(recommend(&more, &s).unwrap().k, 6);
        // Never above the mixture criteria's choice.
        let mut s2 = s.clone();
        s2.insert("bic_full".into(), 3);
        s2.insert("icl".into(), 2);
        assert_eq!(recommend(&rows, &s2).unwrap().k, 3);
        // Scenes: the largest stable K with no tiny class.
        let mut scene: Vec<SweepRow> = rows
            .iter()
            .map(|r| SweepRow {
                mean_delta_e2000: None,
                families: None,
                stability: (r.k > 1).then_some(if r.k <= 4 { 0.98 } else { 0.6 }),
                ..r.clone()
            })
            .collect();
        let r = recommend(&scene, &s).unwrap();
        assert_eq!((r.k, r.rule.as_str()), (4, "stable classes"));
        assert!(r.reason.contains("Not K = 5"), "{}", r.reason);
        scene[3].smallest_share = 0.001;
        assert_eq!(recommend(&scene, &s).unwrap().k, 3);
    }

    /// The chart's labels (boxes estimated at 0.6 em per character, taller than the
    /// glyphs) never overlap each other, never cross a plotted curve, and stay on the
    /// canvas, for a colour sweep and a scene sweep over short and long ranges.
    #[test]
    fn chart_labels_do_not_overlap_each_other_or_the_curves() {
        let seg_hits_box = |a: (f64, f64), b: (f64, f64), t: &TextBox| -> bool {
            // Sample the segment finely (0.5 px): enough for boxes at least 7 px tall.
            let n = (((b.0 - a.0).hypot(b.1 - a.1)) / 0.5).ceil().max(1.0) as usize;
            (0..=n).any(|i| {
                let f = i as f64 / n as f64;
                let (x, y) = (a.0 + f * (b.0 - a.0), a.1 + f * (b.1 - a.1));
                x >= t.x0 - 1.0 && x <= t.x1 + 1.0 && y >= t.y0 - 1.0 && y <= t.y1 + 1.0
            })
        };
        for (ks, colour) in [
            ((1, 16), true),
            ((2, 6), true),
            ((2, 40), false),
            ((3, 3), true),
        ] {
            let rows: Vec<SweepRow> = (ks.0..=ks.1)
                .map(|k| {
                    let mut r = row(k);
                    if !colour {
                        r.mean_delta_e2000 = None;
                        r.p95_delta_e2000 = None;
                        r.closest_delta_e2000 = None;
                        r.families = None;
                    }
                    // Curves that wander over the whole frame, including its top corners.
                    r.bic_full = Some(((k * 7919) % 13) as f64);
                    r.silhouette = Some(if k % 2 == 0 { 0.9 } else { -0.2 });
                    r
                })
                .collect();
            let suggested = suggest(&rows);
            let doc = SweepDocument {
                header: DocumentHeader {
                    tool_version: "test".into(),
                    input: Some("a-rather-long-file-name-for-the-heading.png".into()),
                    seed: 1,
                    engine: EngineOptions::default(),
                },
                features: "cielab".into(),
                silhouette_sample: 2000,
                covariance_floor: 0.25,
                recommended: recommend(&rows, &suggested),
                suggested,
                rows,
            };
            let c = render_svg(&doc, Space::Cielab);
            let t = &c.layout.texts;
            assert!(t.len() > 40);
            for (i, a) in t.iter().enumerate() {
                assert!(
                    a.x0 >= 0.0 && a.x1 <= 820.0 && a.y0 >= 0.0 && a.y1 <= 1290.0,
                    "off the canvas: {a:?}"
                );
                for b in &t[i + 1..] {
                    let apart = a.x1 <= b.x0 || b.x1 <= a.x0 || a.y1 <= b.y0 || b.y1 <= a.y0;
                    assert!(apart, "{ks:?}: {a:?} overlaps {b:?}");
                }
                for curve in &c.layout.curves {
                    for w in curve.windows(2) {
                        assert!(!seg_hits_box(w[0], w[1], a), "{ks:?}: curve crosses {a:?}");
                    }
                    for &p in curve {
                        assert!(!seg_hits_box(p, p, a), "{ks:?}: point inside {a:?}");
                    }
                }
            }
        }
    }
}
