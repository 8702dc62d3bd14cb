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

mod document;
mod fit;
mod legend;
mod pass2;
mod preview;
mod stats;

pub use crate::features::scene::{
    normalised_difference, parse_bands, IndexSpec, Scale, SceneOptions,
};
pub use document::{classes_csv, ClassReport, ClassesDocument, FeatureStats};
pub use fit::{RestartCheck, RESTART_AGREEMENT_MIN};
pub use preview::{class_colours, preview_with_legend};

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
/// before the output folder is prepared, then pass 2 and the other outputs.
pub fn landcover_file(
    input: &Path,
    out_dir: &Path,
    opts: &LandcoverOptions,
) -> Result<LandcoverReport> {
    let t0 = Instant::now();
    let phases = RefCell::new(Phases::start("landcover"));
    let mark = |name: &str| phases.borrow_mut().mark(name);
    let params = opts.params().check()?;
    opts.check_k()?;
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
    let names = output_names(&crate::output::stem_of(input)?);
    let load = || -> Result<FittedScene> {
        let scene = scene_sample(input, &opts.scene, opts.engine.seed, &opts.limits, opts.k)?;
        mark("pass 1 (statistics, sample)");
        let fitted = FittedScene::fit(scene, &params, Some((second_seed, &second)))?;
        mark("fit");
        Ok(fitted)
    };
    let (document, outputs) =
        crate::output::one_input(input, out_dir, &[], &names, load, |mut scene, set| {
            let pass = pass2::classify_scene(&mut scene, set, &names[0], &names[1])?;
            mark("pass 2 (classes, statistics)");
            let colours = class_colours(scene.classes.k);
            let document = ClassesDocument::build(input, opts, &scene, &pass.stats, &colours);
            let legend = legend::entries(&document, &colours);
            let (w, h) = (scene.info.width, scene.info.height);
            let metres = scene.areas.at(w / 2, h / 2).map(f64::sqrt);
            set.write(&names[2], |wr| {
                pass.preview.write_png_legend(wr, &colours, &legend, metres)
            })?;
            set.write_bytes(&names[3], document.to_json().as_bytes())?;
            set.write_bytes(&names[4], classes_csv(&document).as_bytes())?;
            Ok(document)
        })?;
    Ok(LandcoverReport {
        outputs,
        document,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

#[cfg(test)]
mod tests;
