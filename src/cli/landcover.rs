//! Land-cover models on the command line: `landcover-sample` (one raster's sample to a
//! file), `landcover-fit` (one model from sample files or rasters), and the model flags of
//! `landcover` (`--model`, `--save-model`).

use super::engine::{EngineFlags, SceneFlags};
use super::stdio::emit_json;
use crate::error::Error;
use crate::landcover;
use crate::limits::Limits;
use crate::rng::DEFAULT_SEED;
use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

/// Flags a saved model fixes: `landcover --model` refuses them.
pub(super) const MODEL_FIXES: [&str; 19] = [
    "k",
    "bands",
    "index",
    "scale",
    "nodata",
    "sample",
    "mode",
    "beta",
    "seed",
    "restarts",
    "max_iter",
    "tolerance",
    "shift_tolerance",
    "refine",
    "anneal",
    "anneal_start",
    "anneal_end",
    "anneal_factor",
    "split_merge",
];

pub(super) const SAMPLE_EXAMPLES: &str = "\
Examples:
  chromasift landcover-sample tiles/t03.tif --seed 7 --sample 200000 -o samples/t03.sample

Writes one file: the raster's seeded grid sample and the statistics of every feature over
its valid pixels, for `landcover-fit`. --scale is the fit's setting: a sample is unscaled.";

pub(super) const FIT_EXAMPLES: &str = "\
Examples:
  chromasift landcover-fit samples/t01.sample samples/t02.sample -k 6 --seed 7 -o valley.model.json
  chromasift landcover-fit --list samples.txt -k 6 --seed 7 -o valley.model.json
  chromasift landcover-fit tiles/t01.tif tiles/t02.tif -k 6 --seed 7 --sample 200000 -o valley.model.json
  chromasift landcover tiles/t02.tif --model valley.model.json -o classes/

Inputs are sample files (from landcover-sample) or rasters, sampled here exactly as
landcover-sample would: the same inputs in the same order give the same model file.";

/// Flags of `landcover-sample`.
#[derive(Debug, Args, Clone)]
pub struct LandcoverSampleArgs {
    /// Raster: TIFF/GeoTIFF, or PNG/JPEG (R, G, B).
    pub input: PathBuf,

    /// The sample file to write.
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: PathBuf,

    /// Seed of the grid sample; `landcover-fit` must use the same seed.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,

    /// Refuse rasters with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = landcover::MAX_SCENE_PIXELS, value_name = "N")]
    pub max_pixels: u64,

    #[command(flatten)]
    pub scene: SceneFlags,
}

/// Flags of `landcover-fit`.
#[derive(Debug, Args, Clone)]
pub struct LandcoverFitArgs {
    /// Sample files (from landcover-sample) or rasters, in the order they are combined.
    pub inputs: Vec<PathBuf>,

    /// A text file listing inputs, one path per line (blank lines and lines starting with
    /// '#' are skipped); they come after any inputs given on the command line.
    #[arg(long, value_name = "FILE")]
    pub list: Option<PathBuf>,

    /// The model file to write (JSON).
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: PathBuf,

    /// Number of classes (at most 255).
    #[arg(short = 'k', long = "k", default_value_t = 6, value_name = "K")]
    pub k: usize,

    /// Most rows the fit runs on; when the samples together hold more, a seeded draw keeps
    /// exactly this many.
    #[arg(long = "fit-rows", default_value_t = 2_000_000, value_name = "N", value_parser = super::engine::positive_count)]
    pub fit_rows: usize,

    /// Refuse rasters with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = landcover::MAX_SCENE_PIXELS, value_name = "N")]
    pub max_pixels: u64,

    /// Also print the model on standard output.
    #[arg(long)]
    pub json: bool,

    /// For raster inputs; with sample files, --bands, --index and --nodata must be left out
    /// or equal what the files record.
    #[command(flatten)]
    pub scene: SceneFlags,

    #[command(flatten)]
    pub engine: EngineFlags,
}

pub(super) fn run_sample(args: &LandcoverSampleArgs) -> Result<ExitCode, Error> {
    let opts = landcover::SampleOptions {
        scene: args.scene.options(),
        seed: args.seed,
        limits: Limits::with_max_pixels(args.max_pixels),
    };
    let h = landcover::write_sample_file(&args.input, &args.out, &opts)?;
    eprintln!(
        "chromasift: {}: {} sample rows of {} features from {} valid pixels -> {}",
        super::stdio::shown_path(&args.input),
        h.rows,
        h.dim,
        h.valid_pixels,
        args.out.display()
    );
    Ok(ExitCode::SUCCESS)
}

pub(super) fn run_fit(args: &LandcoverFitArgs) -> Result<ExitCode, Error> {
    let limits = Limits::with_max_pixels(args.max_pixels);
    let mut inputs = args.inputs.clone();
    if let Some(list) = &args.list {
        inputs.extend(landcover::read_list_file(list, &limits)?);
    }
    let opts = landcover::FitModelOptions {
        k: args.k,
        scene: args.scene.options(),
        engine: args.engine.options(),
        fit_rows: args.fit_rows,
        limits,
    };
    let model = landcover::fit_model(&inputs, &opts)?;
    let json = model.to_json();
    let spare: Vec<&std::path::Path> = inputs.iter().map(PathBuf::as_path).collect();
    crate::output::write_file_sparing(&args.out, json.as_bytes(), &spare)?;
    eprintln!(
        "chromasift: model of {} classes fitted on {} rows from {} inputs -> {}",
        model.k,
        model.fit_rows,
        model.sources.len(),
        args.out.display()
    );
    eprintln!("chromasift: caution: {}", landcover::CAUTION);
    if args.json {
        emit_json(&model);
    }
    Ok(ExitCode::SUCCESS)
}

/// `landcover`, fitting or applying a saved model.
pub(super) fn run_landcover(args: &super::LandcoverArgs) -> Result<ExitCode, Error> {
    let out = &args.rest.output.out;
    let report = match &args.model {
        Some(path) => {
            let limits = Limits::with_max_pixels(args.max_pixels);
            let model = landcover::LandcoverModel::read(path, &limits)?;
            let name = landcover::source_file_name(path);
            landcover::landcover_with_model(
                &args.input,
                out,
                &model,
                &name,
                args.rest.scene.exclude.as_deref(),
                &limits,
            )?
        }
        None => landcover::landcover_file(&args.input, out, &args.options())?,
    };
    if let (Some(path), Some(model)) = (&args.save_model, &report.model) {
        crate::output::write_file_sparing(path, model.to_json().as_bytes(), &[&args.input])?;
    }
    let d = &report.document;
    eprintln!(
        "chromasift: {}: {} classes over {} valid pixels ({} nodata), SSE {:.6e}, {:.2} s",
        super::stdio::shown_path(&args.input),
        d.k,
        d.valid_pixels,
        d.nodata_pixels,
        d.sse,
        report.seconds
    );
    for w in &d.warnings {
        eprintln!(
            "chromasift: warning: {}: {}",
            super::stdio::shown_path(&args.input),
            super::help::flag_wording(w)
        );
    }
    eprintln!("chromasift: caution: {}", landcover::CAUTION);
    if args.rest.output.json {
        emit_json(d);
    }
    Ok(ExitCode::SUCCESS)
}

pub(super) const ASSESS_EXAMPLES: &str = "\
Examples:
  chromasift landcover-assess classes/valley.classes.tif --reference survey.tif -o check/
  chromasift landcover-assess classes/valley.classes.tif --points field-points.csv --match majority -o check/

Writes STEM.assessment.json (matching, confusion matrix, overall accuracy, kappa, producer's
and user's accuracy, adjusted Rand index, error-adjusted areas with 95 % intervals after
Olofsson et al. 2014) and STEM.confusion.csv. Points: a CSV with x, y (in the raster's CRS)
and label columns.";

/// Flags of `landcover-assess`.
#[derive(Debug, Args, Clone)]
#[command(group(clap::ArgGroup::new("source").required(true).args(["reference", "points"])))]
pub struct LandcoverAssessArgs {
    /// The class raster (STEM.classes.tif).
    pub classes: PathBuf,

    /// A reference raster on the same grid: whole-number labels, 0 or its nodata value
    /// where there is no reference.
    #[arg(long, value_name = "FILE")]
    pub reference: Option<PathBuf>,

    /// Reference points: CSV with x, y (in the raster's CRS) and label columns.
    #[arg(long, value_name = "FILE")]
    pub points: Option<PathBuf>,

    /// How clusters get reference labels: hungarian (one label per cluster, most agreement;
    /// clusters left over take their majority label), majority, or same (class numbers
    /// are the labels already).
    #[arg(
        long = "match",
        default_value = "hungarian",
        value_name = "hungarian|majority|same"
    )]
    pub matching: landcover::Matching,

    /// Refuse rasters with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = landcover::MAX_SCENE_PIXELS, value_name = "N")]
    pub max_pixels: u64,

    #[command(flatten)]
    pub output: super::engine::FolderOutput,
}

pub(super) fn run_assess(args: &LandcoverAssessArgs) -> Result<ExitCode, Error> {
    let reference = match (&args.reference, &args.points) {
        (Some(r), _) => landcover::Reference::Raster(r.clone()),
        (None, Some(p)) => landcover::Reference::Points(p.clone()),
        (None, None) => unreachable!("clap requires one"),
    };
    let limits = Limits::with_max_pixels(args.max_pixels);
    let (doc, _) = landcover::assess_file(
        &args.classes,
        &reference,
        args.matching,
        &args.output.out,
        &limits,
    )?;
    let pct = |v: Option<f64>| {
        v.map(|x| format!("{:.1} %", 100.0 * x))
            .unwrap_or("-".into())
    };
    eprintln!(
        "chromasift: {}: {} reference units, overall accuracy {}, kappa {}",
        args.classes.display(),
        doc.units,
        pct(doc.overall_accuracy),
        doc.kappa.map(|k| format!("{k:.3}")).unwrap_or("-".into())
    );
    if doc.points_outside + doc.points_on_nodata > 0 {
        eprintln!(
            "chromasift: note: {} points outside the raster and {} on nodata were left out",
            doc.points_outside, doc.points_on_nodata
        );
    }
    for w in &doc.warnings {
        eprintln!(
            "chromasift: warning: {}: {}",
            args.classes.display(),
            super::help::flag_wording(w)
        );
    }
    if args.output.json {
        emit_json(&doc);
    }
    Ok(ExitCode::SUCCESS)
}

pub(super) const LABEL_EXAMPLES: &str = "\
Examples:
  chromasift landcover-label classes/valley.classes.tif --labels valley-labels.csv -o map/
  chromasift landcover-label classes/valley.classes.tif --labels valley-labels.csv --min-unit 0.5ha -o map/

The label file is CSV with a header: class,label[,colour], e.g. `2,woodland,#2e7d32`.
Classes given one label merge. Writes STEM.labelled.tif (label numbers, 0 = nodata, the class
raster's georeferencing), STEM.labelled.png (with the label legend), STEM.labels.json and
STEM.labels.csv (pixels and areas per label, what the minimum mapping unit changed).";

/// Flags of `landcover-label`.
#[derive(Debug, Args, Clone)]
#[command(group(clap::ArgGroup::new("what").required(true).multiple(true).args(["labels", "min_unit", "polygons"])))]
pub struct LandcoverLabelArgs {
    /// The class raster (STEM.classes.tif).
    pub classes: PathBuf,

    /// Label file: CSV with class, label and optional colour (#rrggbb) columns.
    #[arg(long, value_name = "FILE")]
    pub labels: Option<PathBuf>,

    /// Minimum mapping unit: patches (8-connected) smaller than this merge into the
    /// neighbouring label they share the longest border with. In ha, m2 or px (0.5ha,
    /// 5000m2, 12px); ha and m2 need a projected CRS in metres.
    #[arg(long = "min-unit", value_name = "SIZE")]
    pub min_unit: Option<landcover::MinUnit>,

    /// Also write each patch as a polygon: geojson (STEM.patches.geojson, longitude and
    /// latitude on WGS 84) and/or gpkg (STEM.patches.gpkg, the raster's CRS), separated by
    /// commas. Each polygon has its class, label, area_m2 and mean_uncertainty.
    #[arg(long, value_name = "geojson,gpkg", value_delimiter = ',')]
    pub polygons: Vec<PolygonFormat>,

    /// Uncertainty raster for the polygons' mean uncertainty (default: STEM.uncertainty.tif
    /// beside the class raster, when there is one).
    #[arg(long, value_name = "FILE")]
    pub uncertainty: Option<PathBuf>,

    /// Refuse rasters with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = landcover::MAX_SCENE_PIXELS, value_name = "N")]
    pub max_pixels: u64,

    #[command(flatten)]
    pub output: super::engine::FolderOutput,
}

/// A polygon file format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum PolygonFormat {
    Geojson,
    Gpkg,
}

pub(super) fn run_label(args: &LandcoverLabelArgs) -> Result<ExitCode, Error> {
    let opts = landcover::LabelOptions {
        labels: args.labels.clone(),
        min_unit: args.min_unit,
        geojson: args.polygons.contains(&PolygonFormat::Geojson),
        geopackage: args.polygons.contains(&PolygonFormat::Gpkg),
        uncertainty: args.uncertainty.clone(),
        limits: Limits::with_max_pixels(args.max_pixels),
    };
    let doc = landcover::label_file(&args.classes, &args.output.out, &opts)?;
    eprintln!(
        "chromasift: {}: {} labels",
        args.classes.display(),
        doc.labels.len()
    );
    if let Some(px) = doc.min_unit_pixels {
        eprintln!(
            "chromasift: minimum mapping unit {px} pixels: {} patches merged, {} pixels changed, \
             {} smaller patches kept (only nodata or the edge around them)",
            doc.patches_merged, doc.pixels_changed, doc.patches_kept_isolated
        );
    }
    for w in &doc.warnings {
        eprintln!(
            "chromasift: warning: {}: {}",
            args.classes.display(),
            super::help::flag_wording(w)
        );
    }
    if args.output.json {
        emit_json(&doc);
    }
    Ok(ExitCode::SUCCESS)
}
