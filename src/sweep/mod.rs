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

mod chart;
mod measures;
mod recommend;

use crate::cluster::{Dataset, EngineOptions};
use crate::colour::Space;
use crate::error::{Error, ParamsError, Result};
use crate::features::image::{image_colours, ImageColours, InputProfile};
use crate::features::rows::entry_features;
use crate::features::scene::{scene_sample, SceneOptions};
use crate::limits::Limits;
use crate::output::stem_of;
use crate::output::DocumentHeader;
use crate::raster;
pub use chart::sweep_svg;
pub use measures::{
    covariance_floor, sweep_rows, FAMILY_DELTA_E2000, MIN_SHARE, MIN_STABILITY, STABILITY_RUNS,
};
pub use recommend::{recommend, suggest};
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

/// The largest K of a sweep's range (it fits and scores every K).
pub const MAX_SWEEP_K: usize = 256;

impl std::str::FromStr for KRange {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let bad = || format!("K range must look like 2..16 (both ends included), got '{s}'");
        let (a, b) = s.trim().split_once("..").ok_or_else(bad)?;
        let b = b.strip_prefix('=').unwrap_or(b);
        let min: usize = a.trim().parse().map_err(|_| bad())?;
        let max: usize = b.trim().parse().map_err(|_| bad())?;
        if min == 0 {
            return Err(crate::error::ParamsError::KTooSmall(0).to_string());
        }
        if max < min {
            return Err(format!("K range end is below its start in '{s}'"));
        }
        if max > MAX_SWEEP_K {
            return Err(crate::error::ParamsError::KTooLarge {
                got: max,
                max: MAX_SWEEP_K,
                why: ": a sweep fits every K of its range",
            }
            .to_string());
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
    /// (the previous K's means plus one, refined, then Lloyd), so it uses the seed,
    /// refinement, iteration limit and tolerances; the other settings are reported as
    /// ignored.
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
    /// How an image's colours were read (absent for a multi-band scene).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input_profile: Option<InputProfile>,
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
    match ext.as_deref() {
        Some("stack") => return Ok(true), // one file per band: always a scene
        Some("tif") | Some("tiff") => {}
        _ => return Ok(false),
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
    let mut notes = Vec::new();
    let names = OUTPUT_NAMES.map(String::from);
    let (document, outputs) = crate::output::one_input(
        input,
        out_dir,
        &[],
        &names,
        || Ok(()),
        |(), set| {
            let document = sweep_document(input, opts, &mut notes)?;
            set.write_bytes(OUTPUT_NAMES[0], sweep_csv(&document).as_bytes())?;
            let json = serde_json::to_string_pretty(&document).expect("sweep document serialises");
            set.write_bytes(OUTPUT_NAMES[1], format!("{json}\n").as_bytes())?;
            set.write_bytes(OUTPUT_NAMES[2], sweep_svg(&document, opts.space).as_bytes())?;
            Ok(document)
        },
    )?;
    Ok(SweepReport {
        outputs,
        document,
        notes,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// The engine settings a sweep uses, as its document records them: the warm-started K
/// path extends the previous K's means by one, refines them and runs Lloyd, with no
/// restarts, annealing or split-and-merge moves, in hard mode.
fn used_engine(e: &EngineOptions) -> EngineOptions {
    let d = EngineOptions::default();
    EngineOptions {
        seed: e.seed,
        max_iter: e.max_iter,
        tolerance: e.tolerance,
        shift_tolerance: e.shift_tolerance,
        refine: e.refine,
        ..d
    }
}

/// The sweep document of one input: every K's measures, the suggestions and the
/// recommendation; remarks for the user go to `notes`.
fn sweep_document(
    input: &Path,
    opts: &SweepOptions,
    notes: &mut Vec<String>,
) -> Result<SweepDocument> {
    let ignored: Vec<String> = opts
        .engine
        .changed()
        .into_iter()
        .filter(|n| {
            !matches!(
                *n,
                "seed" | "max_iter" | "tolerance" | "shift_tolerance" | "refine"
            )
        })
        .map(|n| format!("`{n}`"))
        .collect();
    if !ignored.is_empty() {
        notes.push(format!(
            "a sweep fits every K along one warm-started path, so {} have no effect here",
            ignored.join(", ")
        ));
    }
    let mut input_profile = None;
    let (rows, features, floor) = if is_scene(input, opts)? {
        let scene_opts = opts.scene.clone().unwrap_or_default();
        let s = scene_sample(
            input,
            &scene_opts,
            opts.engine.seed,
            &opts.limits,
            opts.range.min,
        )?;
        let data = Dataset::new(&s.sample, s.dim, None)?;
        let rows = sweep_rows(&data, None, opts.space, opts);
        (
            rows,
            format!("bands/indices {}", s.feature_names().join(",")),
            covariance_floor(&data, None),
        )
    } else {
        let img = raster::decode(input, &opts.limits)?;
        // Read through the image's embedded profile, as `reduce` reads it.
        let ImageColours { indexed, profile } = image_colours(&img);
        drop(img);
        let h = indexed.histogram;
        let record = InputProfile::of_image(file_name(input), profile.as_ref());
        notes.extend(record.note.clone());
        input_profile = Some(record);
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
        let values = if last == 1 { "value" } else { "values" };
        notes.push(format!(
            "the data has only {last} distinct {values} to cluster; the sweep stops at K = {last}"
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
            used_engine(&opts.engine),
        ),
        features,
        silhouette_sample: opts.silhouette_sample,
        covariance_floor: floor,
        recommended: recommend(&rows, &suggested),
        suggested,
        rows,
        input_profile,
    };
    Ok(document)
}

/// The file name of `path` (the whole path when it has none).
fn file_name(path: &Path) -> String {
    path.file_name()
        .unwrap_or(path.as_os_str())
        .to_string_lossy()
        .into_owned()
}

fn opt(v: Option<f64>) -> String {
    v.map_or(String::new(), |v| format!("{v}"))
}

/// `sweep.csv`: a header and one row per K, every row of the same shape (plain CSV
/// readers take it whole). The last column, `recommended`, is `true` on the recommended
/// K's row; each criterion's own choice is in `sweep.json` (`suggested`).
pub fn sweep_csv(doc: &SweepDocument) -> String {
    let mut s = String::from(
        "k,sse,mean_delta_e2000,p95_delta_e2000,mean_uncertainty,silhouette,bic,bic_full,icl,stability,closest_delta_e2000,smallest_share,families,recommended\n",
    );
    let best = doc.recommended.as_ref().map(|r| r.k);
    for r in &doc.rows {
        s.push_str(&format!(
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{}\n",
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
            r.families.map_or(String::new(), |f| f.to_string()),
            best == Some(r.k)
        ));
    }
    s
}

#[cfg(test)]
mod tests;
