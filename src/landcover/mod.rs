//! The `landcover` workflow: an unsupervised split of a multi-band raster into K classes,
//! aligned to the map (georeferencing copied), with an uncertainty map and per-class
//! statistics. An unsupervised split is not a validated classification: class numbers
//! mean nothing until someone labels them against ground truth.
//!
//! Streaming: pass 1 reads the raster block by block for feature statistics and a seeded,
//! spatially spread sample; k-means is fitted on the sample; pass 2 assigns every pixel
//! strip by strip while the class raster is written, and hands the uncertainty rows to a
//! second thread that writes the uncertainty raster. Memory is bounded by the sample and a
//! few strips, not by the scene.
//!
//! The parts, in the order they run:
//! - `features::scene` (pass 1): feature statistics and the sample;
//! - `fit`: k-means on the sample, classes numbered by sample share, assignment of rows;
//! - `pass2`: the class and uncertainty rasters, with `stats` (per class) and the
//!   `preview` grid;
//! - `document`: the classes document and CSV; `preview`: the PNG with its legend.

mod accuracy;
mod assess;
mod combine;
mod document;
mod finish;
mod fit;
mod labels;
mod legend;
mod model;
mod pass2;
mod patch_out;
mod polygons;
mod preview;
mod sample;
mod stats;
mod vector_out;

pub use crate::features::scene::{
    normalised_difference, parse_bands, IndexSpec, Scale, SceneOptions,
};
pub use accuracy::{
    adjusted_rand_index, hungarian_max, AreaEstimate, AreaEstimates, Confusion, LabelAccuracy,
};
pub use assess::{
    assess, assess_file, assessment_names, AssessmentDocument, ClusterLabel, Matching, Reference,
};
pub use combine::{fit_model, read_list_file, FitModelOptions};
pub use document::{classes_csv, ClassReport, ClassesDocument, FeatureStats};
pub use finish::{label_file, label_names, LabelOptions, LabelReport, LabelsDocument, MinUnit};
pub use fit::{RestartCheck, RESTART_AGREEMENT_MIN};
pub use labels::{labelled_preview, read_labels, Label, LabelSet};
pub use model::{
    LandcoverModel, ModelClass, ModelSource, ScalingRecord, MODEL_FORMAT, MODEL_FORMAT_VERSION,
};
pub use polygons::{patch_ids, ring_pixels, vectorise, Patch};
pub use preview::{class_colours, preview_with_legend};
pub use sample::source_name as source_file_name;
pub use sample::{
    read_sample_file, sample_scene, write_sample_file, SampleHeader, SampleOptions,
    SceneSampleData, SAMPLE_FORMAT_VERSION,
};
pub use vector_out::{geojson, gpkg_geometry, write_geopackage, PatchAttributes, GPKG_TABLE};

use crate::cluster::{EngineOptions, KMeansParams};
use crate::error::{ParamsError, Result};
use crate::features::scene::scene_sample;
use crate::limits::Limits;
use crate::trace::Phases;
use fit::FittedScene;
use std::cell::RefCell;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Value written to the uncertainty raster where the class raster has nodata (class 0).
pub const UNCERTAINTY_NODATA: f32 = -1.0;

/// Settings of a land-cover split.
#[derive(Debug, Clone, PartialEq)]
pub struct LandcoverOptions {
    /// Classes (at least 1, at most [`MAX_CLASSES`]). Default: 6.
    pub k: usize,
    /// How pixels become feature rows (bands, indices, scaling, nodata, sample).
    pub scene: SceneOptions,
    /// The k-means engine's settings.
    pub engine: EngineOptions,
    pub limits: Limits,
}

impl Default for LandcoverOptions {
    fn default() -> Self {
        LandcoverOptions {
            k: 6,
            scene: SceneOptions::default(),
            engine: EngineOptions::default(),
            limits: Limits::with_max_pixels(MAX_SCENE_PIXELS),
        }
    }
}

impl LandcoverOptions {
    fn params(&self) -> KMeansParams {
        self.engine.params(self.k)
    }

    /// Checks the class count against the 8-bit class raster.
    fn check_k(&self) -> Result<()> {
        if self.k > MAX_CLASSES {
            return Err(ParamsError::KTooLarge {
                got: self.k,
                max: MAX_CLASSES,
                why: ": the 8-bit class raster numbers classes 1 to 255 (0 is nodata)",
            }
            .into());
        }
        Ok(())
    }
}

/// The wording of the caution, shared by `--help`, the README and the document.
pub const CAUTION: &str =
    "unsupervised split, not a validated land-cover classification: class numbers \
carry no meaning until someone labels them; check against ground truth before any decision";

/// Default pixel limit of a scene: rasters are read strip by strip, so it is higher than
/// the limit for images, which are decoded whole.
pub const MAX_SCENE_PIXELS: u64 = 1_000_000_000;

/// Most classes: `classes.tif` is 8-bit, with 0 for nodata.
pub const MAX_CLASSES: usize = 255;

/// What [`landcover_file`] did.
#[derive(Debug, Clone)]
pub struct LandcoverReport {
    pub outputs: Vec<PathBuf>,
    pub document: ClassesDocument,
    /// The model this run fitted or applied (the same bytes `landcover_fit` would write).
    pub model: Option<LandcoverModel>,
    pub seconds: f64,
}

/// Output names (exact; other tools read them).
pub fn output_names(stem: &str) -> [String; 5] {
    [
        format!("{stem}.classes.tif"),
        format!("{stem}.uncertainty.tif"),
        format!("{stem}.classes.png"),
        format!("{stem}.classes.json"),
        format!("{stem}.classes.csv"),
    ]
}

/// Runs the whole workflow on a file and writes all outputs atomically: pass 1 and the fit
/// before the output folder is prepared, then pass 2 and the other outputs. The report
/// carries the fitted model (see [`LandcoverModel`]).
pub fn landcover_file(
    input: &Path,
    out_dir: &Path,
    opts: &LandcoverOptions,
) -> Result<LandcoverReport> {
    // The class raster's bound first: it is the tighter one.
    opts.check_k()?;
    let params = opts.params().check()?;
    // A second start from another seed, compared with the kept solution (see
    // `RestartCheck`).
    let second_seed = opts.engine.seed ^ 0x5eed_0000_0000_0001;
    let second = EngineOptions {
        seed: second_seed,
        restarts: 1,
        ..opts.engine
    }
    .params(opts.k)
    .check()?;
    let mut model = None;
    let load = |mark: &dyn Fn(&str)| -> Result<FittedScene> {
        let scene = scene_sample(input, &opts.scene, opts.engine.seed, &opts.limits, opts.k)?;
        mark("pass 1 (statistics, sample)");
        let fitted = FittedScene::fit(scene, &params, Some((second_seed, &second)))?;
        mark("fit");
        model = Some(model_of_scene(input, opts, &fitted));
        Ok(fitted)
    };
    let mut report = run(input, out_dir, opts, None, load)?;
    report.model = model;
    Ok(report)
}

/// Applies a saved model to `input`: the same outputs as [`landcover_file`], with the
/// model's class numbers. A raster whose bands or features differ from the model's is
/// refused. `model_name` is recorded in the classes document; `exclude` is a mask of
/// pixels to leave out, on `input`'s grid (as `--exclude` when fitting).
pub fn landcover_with_model(
    input: &Path,
    out_dir: &Path,
    model: &LandcoverModel,
    model_name: &str,
    exclude: Option<&Path>,
    limits: &Limits,
) -> Result<LandcoverReport> {
    let mut scene = model.scene_options();
    scene.exclude = exclude.map(Path::to_path_buf);
    let opts = LandcoverOptions {
        k: model.k,
        scene,
        engine: model.engine,
        limits: *limits,
    };
    let load = |mark: &dyn Fn(&str)| -> Result<FittedScene> {
        let fitted = model.open_for(input, exclude, limits)?;
        mark("pass 1 (statistics)");
        Ok(fitted)
    };
    let mut report = run(input, out_dir, &opts, Some(model_name), load)?;
    report.model = Some(model.clone());
    Ok(report)
}

/// The model a single-scene run fitted.
fn model_of_scene(input: &Path, opts: &LandcoverOptions, fitted: &FittedScene) -> LandcoverModel {
    let rows = fitted.sample_pixels;
    let header = sample::SampleHeader::describe(
        input,
        &fitted.info,
        fitted.classes.features(),
        &opts.scene,
        opts.engine.seed,
        (fitted.valid_pixels, fitted.total_pixels),
        rows,
    );
    let source = ModelSource {
        name: header.source.clone(),
        width: header.width,
        height: header.height,
        valid_pixels: header.valid_pixels,
        sample_rows: rows,
    };
    LandcoverModel::build(
        &fitted.classes,
        fitted.summary.as_ref().expect("a fit has a summary"),
        &header,
        opts.scene.scale,
        opts.engine,
        vec![source],
    )
}

/// The shared run: `load` makes the fitted scene (it gets a timing mark), then pass 2 and
/// the documents.
fn run(
    input: &Path,
    out_dir: &Path,
    opts: &LandcoverOptions,
    model_name: Option<&str>,
    load: impl FnOnce(&dyn Fn(&str)) -> Result<FittedScene>,
) -> Result<LandcoverReport> {
    let t0 = Instant::now();
    let phases = RefCell::new(Phases::start("landcover"));
    let mark = |name: &str| phases.borrow_mut().mark(name);
    let names = output_names(&crate::output::stem_of(input)?);
    let (document, outputs) = crate::output::one_input(
        input,
        out_dir,
        &[],
        &names,
        || load(&mark),
        |mut scene, set| {
            let pass = pass2::classify_scene(&mut scene, set, &names[0], &names[1])?;
            mark("pass 2 (classes, statistics)");
            // Valid pixels as pass 2 counted them (a saved model has no pass 1).
            scene.valid_pixels = pass.stats.classes.iter().map(|c| c.pixels).sum();
            if scene.valid_pixels == 0 {
                return Err(crate::error::Error::Data(
                    "every pixel is nodata; there is nothing to classify".into(),
                ));
            }
            let colours = class_colours(scene.classes.k);
            let mut document = ClassesDocument::build(input, opts, &scene, &pass.stats, &colours);
            document.model = model_name.map(String::from);
            let legend = legend::entries(&document, &colours);
            let (w, h) = (scene.info.width, scene.info.height);
            let metres = scene.areas.at(w / 2, h / 2).map(f64::sqrt);
            set.write(&names[2], |wr| {
                pass.preview.write_png_legend(wr, &colours, &legend, metres)
            })?;
            set.write_bytes(&names[3], document.to_json().as_bytes())?;
            set.write_bytes(&names[4], classes_csv(&document).as_bytes())?;
            Ok(document)
        },
    )?;
    Ok(LandcoverReport {
        outputs,
        document,
        model: None,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

#[cfg(test)]
mod tests;
