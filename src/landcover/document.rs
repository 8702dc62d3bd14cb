//! The classes document (`STEM.classes.json`) and its CSV table, built from the fitted
//! scene and the statistics of pass 2.

use super::fit::FittedScene;
use super::stats::{ClassStats, ClassTally};
use super::{LandcoverOptions, CAUTION, UNCERTAINTY_NODATA};
use crate::cluster::Mode;
use crate::colour;
use crate::features::scene::{IndexSpec, Scale};
use crate::output::DocumentHeader;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Mean and standard deviation of one feature, in its own units.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FeatureStats {
    /// Band number (as text) or index name.
    pub feature: String,
    /// The band's description from the file (GDAL_METADATA), if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    pub mean: f64,
    pub std: f64,
}

/// One class of the classes document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassReport {
    pub class: usize,
    pub pixels: u64,
    pub share: f64,
    pub area_m2: Option<f64>,
    pub hectares: Option<f64>,
    pub mean_uncertainty: f64,
    /// Display colour in the preview.
    pub hex: String,
    pub bands: Vec<FeatureStats>,
}

/// The classes document (`STEM.classes.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassesDocument {
    /// Tool version, input, seed and every engine setting.
    #[serde(flatten)]
    pub header: DocumentHeader,
    pub caution: String,
    pub k: usize,
    pub mode: Mode,
    pub beta: Option<f64>,
    /// Σ over valid pixels of the squared distance (in the scaled feature space) to the
    /// nearest class mean.
    pub sse: f64,
    pub bands: Vec<usize>,
    pub indices: Vec<String>,
    pub scale: Scale,
    pub nodata: Option<f64>,
    pub valid_pixels: u64,
    pub nodata_pixels: u64,
    pub sample_pixels: usize,
    /// Valid pixels where an index is undefined (its bands sum to 0): classed with the index
    /// at `undefined_index_value`.
    pub undefined_index_pixels: u64,
    pub undefined_index_value: f32,
    /// Per band used: (scale, offset) applied to stored values before features and
    /// statistics (from GDAL_METADATA; (1, 0) when the file gives none).
    pub band_scale_offset: Vec<(f64, f64)>,
    /// What else marks pixels as holding no data besides `nodata`: the alpha band (1-based),
    /// the GDAL mask found, strips or tiles left out of the file, the exclusion raster.
    pub alpha_band: Option<usize>,
    pub gdal_mask: Option<String>,
    pub sparse_blocks: usize,
    pub excluded_by: Option<String>,
    /// The area of every pixel when it is the same everywhere (equal-area or other projected
    /// CRS); `null` when areas vary from pixel to pixel or are unknown.
    pub pixel_area_m2: Option<f64>,
    /// How class areas were obtained (`ellipsoid-geodesic-per-row`,
    /// `ellipsoid-geodesic-lattice`, `equal-area-projection`,
    /// `projected-pixel-size-uncorrected`, `none`), and the CRS as read.
    pub area_method: String,
    pub crs: String,
    /// A second start from another seed compared with the kept solution on the sample.
    pub restart_check: Option<super::RestartCheck>,
    /// Things the reader should know (for example that two starts disagree).
    pub warnings: Vec<String>,
    /// Value of nodata pixels in the uncertainty raster.
    pub uncertainty_nodata: f32,
    pub classes: Vec<ClassReport>,
    /// The saved model applied (its file name), when the classes came from one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub model: Option<String>,
}

impl ClassesDocument {
    /// The document of a split of `input`: settings from `opts`, counts from `scene`,
    /// per-class figures from `stats`, display colours `colours` (one per class).
    pub(super) fn build(
        input: &Path,
        opts: &LandcoverOptions,
        scene: &FittedScene,
        stats: &ClassStats,
        colours: &[[u8; 3]],
    ) -> Self {
        let feats = scene.classes.features();
        let pixel_area = scene.areas.uniform();
        let known = scene.areas.is_known();
        let classes = stats
            .classes
            .iter()
            .zip(colours)
            .enumerate()
            .map(|(i, (tally, &col))| {
                class_report(
                    i + 1,
                    tally,
                    col,
                    (&feats.names, &scene.descriptions),
                    scene.valid_pixels,
                    known,
                )
            })
            .collect();
        ClassesDocument {
            header: DocumentHeader::new(
                input.file_name().map(|n| n.to_string_lossy().into_owned()),
                opts.engine,
            ),
            caution: CAUTION.into(),
            k: scene.classes.k,
            mode: opts.engine.mode,
            beta: scene.classes.beta,
            sse: stats.sse,
            bands: feats.bands.iter().map(|b| b + 1).collect(),
            indices: opts.scene.indices.iter().map(IndexSpec::name).collect(),
            scale: opts.scene.scale,
            nodata: feats.nodata.map(|v| v as f64),
            valid_pixels: scene.valid_pixels,
            nodata_pixels: scene.total_pixels - scene.valid_pixels,
            sample_pixels: scene.sample_pixels,
            undefined_index_pixels: scene.undefined_index_pixels,
            undefined_index_value: crate::features::scene::UNDEFINED_INDEX_VALUE,
            band_scale_offset: feats
                .bands
                .iter()
                .map(|&b| {
                    scene
                        .info
                        .scale_offset
                        .get(b)
                        .copied()
                        .unwrap_or((1.0, 0.0))
                })
                .collect(),
            alpha_band: scene.info.alpha_band,
            gdal_mask: scene.info.mask.clone(),
            sparse_blocks: scene.info.sparse_chunks,
            excluded_by: scene
                .info
                .excluded_by
                .as_ref()
                .map(|p| p.display().to_string()),
            pixel_area_m2: pixel_area,
            area_method: scene.areas.method.name().into(),
            crs: scene.areas.note.clone(),
            restart_check: scene.restart_check.clone(),
            warnings: warnings(scene),
            uncertainty_nodata: UNCERTAINTY_NODATA,
            classes,
            model: None,
        }
    }

    /// The document as pretty JSON with a final newline.
    pub(super) fn to_json(&self) -> String {
        let json = serde_json::to_string_pretty(self).expect("document serialises");
        format!("{json}\n")
    }
}

fn warnings(scene: &FittedScene) -> Vec<String> {
    let mut w = Vec::new();
    if let Some(c) = scene.restart_check.as_ref().filter(|c| c.disagree) {
        w.push(format!(
            "two starts of the fit disagree (adjusted Rand index {:.2} < {}; SSE {:.6e} kept, \
             {:.6e} from seed {}): the split is not stable; try more `restarts` and compare",
            c.ari,
            super::RESTART_AGREEMENT_MIN,
            c.sse,
            c.sse_second,
            c.seed
        ));
    }
    if scene.areas.method == crate::raster::geotiff::AreaMethod::ProjectedPlane {
        w.push(format!(
            "areas are the projected pixel size of {}, which is not known to be equal-area",
            scene.areas.note
        ));
    }
    w
}

/// The report of class number `class` from its tally.
fn class_report(
    class: usize,
    tally: &ClassTally,
    colour: [u8; 3],
    (feature_names, descriptions): (&[String], &[Option<String>]),
    valid_pixels: u64,
    areas_known: bool,
) -> ClassReport {
    let pixels = tally.pixels;
    let area = areas_known.then_some(tally.area_m2);
    ClassReport {
        class,
        pixels,
        share: pixels as f64 / valid_pixels as f64,
        area_m2: area,
        hectares: area.map(|a| a / 10_000.0),
        mean_uncertainty: if pixels > 0 {
            tally.uncertainty / pixels as f64
        } else {
            0.0
        },
        hex: colour::hex(colour),
        bands: tally
            .moments
            .iter()
            .zip(feature_names)
            .zip(descriptions.iter().chain(std::iter::repeat(&None)))
            .map(|((m, n), d)| FeatureStats {
                feature: n.clone(),
                description: d.clone(),
                mean: m.mean,
                std: m.std(),
            })
            .collect(),
    }
}

/// The classes as CSV: one row per class, per-feature mean and std columns.
pub fn classes_csv(doc: &ClassesDocument) -> String {
    let mut s = String::from("class,pixels,share,area_m2,hectares,mean_uncertainty");
    if let Some(c) = doc.classes.first() {
        for f in &c.bands {
            // Column names stay CSV-safe: `ndvi:3,4` becomes `ndvi_3_4`; a band's description
            // follows its number (`mean_4_nir`).
            let name = match &f.description {
                Some(d) => format!("{}_{d}", f.feature),
                None => f.feature.clone(),
            };
            let n: String = name
                .chars()
                .map(|ch| if ch.is_alphanumeric() { ch } else { '_' })
                .collect();
            s.push_str(&format!(",mean_{n},std_{n}"));
        }
    }
    s.push('\n');
    let opt = |v: Option<f64>| v.map(|x| format!("{x:.4}")).unwrap_or_default();
    for c in &doc.classes {
        s.push_str(&format!(
            "{},{},{:.6},{},{},{:.6}",
            c.class,
            c.pixels,
            c.share,
            opt(c.area_m2),
            opt(c.hectares),
            c.mean_uncertainty
        ));
        for f in &c.bands {
            s.push_str(&format!(",{:.6},{:.6}", f.mean, f.std));
        }
        s.push('\n');
    }
    s
}
