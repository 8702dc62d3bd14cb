//! The model file: everything a fit decided (features, scaling, class means, β, engine
//! settings), so that other rasters with the same bands get the same class numbers.

use super::fit::{FitSummary, FittedClasses, FittedScene};
use super::sample::read_bounded;
use super::CAUTION;
use crate::cluster::EngineOptions;
use crate::error::{Error, Result};
use crate::features::scene::{check_options, IndexSpec, Scale, Scaler, SceneOptions};
use crate::limits::Limits;
use crate::raster::geotiff::RasterInfo;
use crate::raster::geotiff::{GeoRaster, PixelAreas};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// The `format` of every model file.
pub const MODEL_FORMAT: &str = "chromasift landcover model";
/// The model format version this build writes and reads.
pub const MODEL_FORMAT_VERSION: u32 = 1;

/// A raster the model was fitted on.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelSource {
    /// File name (without its folder).
    pub name: String,
    pub width: u32,
    pub height: u32,
    pub valid_pixels: u64,
    /// Rows this raster gave to the sample (before any thinning to `fit_rows`).
    pub sample_rows: usize,
}

/// One class of a model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelClass {
    /// Class number, 1..=k.
    pub class: usize,
    /// Share of the fitted rows nearest to this class.
    pub share: f64,
    /// The class mean in the features' own units.
    pub mean: Vec<f64>,
    /// The class mean in the scaled feature space (what pixels are compared with).
    pub mean_scaled: Vec<f64>,
}

/// Per-feature scaling: scaled = (value − offset) × factor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScalingRecord {
    pub offset: Vec<f64>,
    pub factor: Vec<f64>,
}

/// A saved land-cover model (`*.model.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LandcoverModel {
    pub format: String,
    pub format_version: u32,
    pub tool_version: String,
    pub caution: String,
    pub k: usize,
    /// Bands of the rasters (all of them, not only those used).
    pub raster_bands: usize,
    /// Stored sample type of the rasters.
    pub sample_type: String,
    /// Band descriptions, when the rasters have them.
    pub band_descriptions: Option<Vec<String>>,
    /// Each band's scale and offset in the rasters fitted on (1 and 0 for a band without
    /// GDAL's `SCALE`/`OFFSET`): a raster whose numbers are on another scale is refused.
    /// Empty in models written before it was recorded (not checked then).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub band_scale_offset: Vec<(f64, f64)>,
    /// Bands used (1-based).
    pub bands: Vec<usize>,
    pub indices: Vec<String>,
    /// Feature names: band numbers as text, then index names.
    pub features: Vec<String>,
    /// The nodata value asked for (`null`: each raster's own GDAL_NODATA tag).
    #[serde(with = "super::sample::nodata_serde")]
    pub nodata: Option<f64>,
    pub scale: Scale,
    pub scaling: ScalingRecord,
    /// β of the soft assignment and of the uncertainty map (`null`: every row on a mean).
    pub beta: Option<f64>,
    /// Every engine setting of the fit (the seed included).
    pub engine: EngineOptions,
    /// Pixels asked for in each raster's sample.
    pub sample: usize,
    /// Rows the fit ran on.
    pub fit_rows: usize,
    /// The fit's SSE on those rows (scaled features).
    pub sse: f64,
    pub sources: Vec<ModelSource>,
    pub classes: Vec<ModelClass>,
}

impl LandcoverModel {
    /// Opens `input` for a saved model: its classes come from the model (refused when
    /// the raster does not match it). Its valid pixels are counted in pass 2. `exclude`: a
    /// mask on the raster's grid whose non-zero pixels are left out (this raster's clouds,
    /// not part of the model).
    pub(super) fn open_for(
        &self,
        input: &Path,
        exclude: Option<&Path>,
        limits: &Limits,
    ) -> Result<FittedScene> {
        let mut raster = GeoRaster::open(input, limits)?;
        if let Some(mask) = exclude {
            raster.exclude_where(mask, limits)?;
        }
        let info = raster.info().clone();
        let classes = self.classes_for(input, &info)?;
        let descriptions = classes.features().descriptions(&info);
        let areas = PixelAreas::new(&info.geo, info.width, info.height);
        Ok(FittedScene {
            raster,
            total_pixels: info.width as u64 * info.height as u64,
            info,
            valid_pixels: 0,
            sample_pixels: 0,
            undefined_index_pixels: 0,
            descriptions,
            areas,
            restart_check: None,
            classes,
            summary: None,
        })
    }

    /// The model of fitted `classes`; `like` describes the rasters (bands, features,
    /// nodata setting, sample size), `sources` each raster fitted on.
    pub(super) fn build(
        classes: &FittedClasses,
        summary: &FitSummary,
        like: &super::sample::SampleHeader,
        scale: Scale,
        engine: EngineOptions,
        sources: Vec<ModelSource>,
    ) -> LandcoverModel {
        let dim = classes.dim;
        let scaler = classes.scaler();
        let total: u64 = summary.counts.iter().sum();
        let classes_out = classes
            .means_by_class()
            .chunks(dim)
            .zip(&summary.counts)
            .enumerate()
            .map(|(c, (m, &n))| ModelClass {
                class: c + 1,
                share: n as f64 / total.max(1) as f64,
                mean: m
                    .iter()
                    .zip(scaler.offset.iter().zip(&scaler.factor))
                    .map(|(&v, (&o, &f))| v / f + o)
                    .collect(),
                mean_scaled: m.to_vec(),
            })
            .collect();
        LandcoverModel {
            format: MODEL_FORMAT.into(),
            format_version: MODEL_FORMAT_VERSION,
            tool_version: crate::TOOL_VERSION.into(),
            caution: CAUTION.into(),
            k: classes.k,
            raster_bands: like.raster_bands,
            sample_type: like.sample_type.clone(),
            band_descriptions: like.band_descriptions.clone(),
            band_scale_offset: like.band_scale_offset.clone(),
            bands: like.bands.clone(),
            indices: like.indices.clone(),
            features: like.features.clone(),
            nodata: like.nodata_setting,
            scale,
            scaling: ScalingRecord {
                offset: scaler.offset.clone(),
                factor: scaler.factor.clone(),
            },
            beta: classes.beta,
            engine,
            sample: like.sample_target,
            fit_rows: total as usize,
            sse: summary.sse,
            sources,
            classes: classes_out,
        }
    }

    /// The model as pretty JSON with a final newline.
    pub fn to_json(&self) -> String {
        let json = serde_json::to_string_pretty(self).expect("model serialises");
        format!("{json}\n")
    }

    /// Reads a model file and checks that it is whole and consistent.
    pub fn read(path: &Path, limits: &Limits) -> Result<LandcoverModel> {
        let bytes = read_bounded(path, limits)?;
        let bad = |m: String| Error::Decode {
            path: path.into(),
            message: format!("not a usable land-cover model: {m}"),
        };
        let value: serde_json::Value =
            serde_json::from_slice(&bytes).map_err(|e| bad(format!("bad JSON: {e}")))?;
        if value.get("format").and_then(|f| f.as_str()) != Some(MODEL_FORMAT) {
            return Err(bad(format!("its `format` is not \"{MODEL_FORMAT}\"")));
        }
        match value.get("format_version").and_then(|v| v.as_u64()) {
            Some(v) if v == MODEL_FORMAT_VERSION as u64 => {}
            Some(v) => {
                return Err(bad(format!(
                    "format version {v}; this build reads version {MODEL_FORMAT_VERSION}"
                )))
            }
            None => return Err(bad("no `format_version`".into())),
        }
        let model: LandcoverModel =
            serde_json::from_value(value).map_err(|e| bad(format!("{e}")))?;
        model.check().map_err(bad)?;
        Ok(model)
    }

    /// Internal consistency: sizes agree, numbers are finite, indices parse.
    fn check(&self) -> std::result::Result<(), String> {
        let dim = self.features.len();
        if dim == 0 || dim != self.bands.len() + self.indices.len() {
            return Err("`features` must list the bands, then the indices".into());
        }
        if self.k == 0 || self.k > super::MAX_CLASSES || self.classes.len() != self.k {
            return Err(format!(
                "`k` is {} but there are {} classes",
                self.k,
                self.classes.len()
            ));
        }
        if self.scaling.offset.len() != dim || self.scaling.factor.len() != dim {
            return Err("`scaling` needs one offset and one factor per feature".into());
        }
        let finite = |v: &[f64]| v.iter().all(|x| x.is_finite());
        if !finite(&self.scaling.offset) || !finite(&self.scaling.factor) {
            return Err("`scaling` holds a value that is not finite".into());
        }
        for (i, c) in self.classes.iter().enumerate() {
            if c.class != i + 1 || c.mean_scaled.len() != dim || !finite(&c.mean_scaled) {
                return Err(format!(
                    "class {} must be numbered {} and have {dim} finite scaled means",
                    c.class,
                    i + 1
                ));
            }
        }
        if let Some(b) = self.beta {
            if !(b.is_finite() && b > 0.0) {
                return Err("`beta` must be a positive number or null".into());
            }
        }
        if self.bands.iter().any(|&b| b == 0 || b > self.raster_bands) {
            return Err("a band number is outside `raster_bands`".into());
        }
        for ix in &self.indices {
            ix.parse::<IndexSpec>()?;
        }
        Ok(())
    }

    /// The scene settings this model fixes (bands, indices, scaling, nodata).
    pub fn scene_options(&self) -> SceneOptions {
        SceneOptions {
            bands: Some(self.bands.clone()),
            indices: self
                .indices
                .iter()
                .map(|s| s.parse().expect("checked when read"))
                .collect(),
            scale: self.scale,
            nodata: self.nodata,
            sample: self.sample,
            ..SceneOptions::default()
        }
    }

    /// The classes of this model for a raster described by `info`, refused (naming
    /// `raster`) when its bands do not match the model's.
    pub(super) fn classes_for(&self, raster: &Path, info: &RasterInfo) -> Result<FittedClasses> {
        let refuse = |m: String| Error::InputData {
            path: raster.into(),
            message: format!("does not match the model: {m}"),
        };
        if info.bands != self.raster_bands {
            return Err(refuse(format!(
                "it has {} bands, the model was fitted on rasters of {}",
                info.bands, self.raster_bands
            )));
        }
        if info.sample.name() != self.sample_type {
            return Err(refuse(format!(
                "its samples are {}, the model's rasters were {} (values on another scale \
                 would be put in the wrong classes)",
                info.sample.name(),
                self.sample_type
            )));
        }
        let described = super::sample::band_descriptions(info);
        if let (Some(m), Some(r)) = (&self.band_descriptions, &described) {
            if m != r {
                return Err(refuse(format!(
                    "its band descriptions are {r:?}, the model's are {m:?}"
                )));
            }
        }
        if !self.band_scale_offset.is_empty() && self.band_scale_offset != info.scale_offset {
            let show = |v: &[(f64, f64)]| {
                v.iter()
                    .map(|(s, o)| format!("scale {s} offset {o}"))
                    .collect::<Vec<_>>()
                    .join("; ")
            };
            return Err(refuse(format!(
                "its bands have {}, the model's rasters had {} (the \
                 same numbers would mean other values; rewrite the raster with the model's \
                 scale tags, or fit a model on it)",
                show(&info.scale_offset),
                show(&self.band_scale_offset)
            )));
        }
        let feats = check_options(&self.scene_options(), info, raster)?;
        let names: Vec<String> = feats.names.clone();
        if names != self.features {
            return Err(refuse(format!(
                "its features would be {names:?}, the model's are {:?}",
                self.features
            )));
        }
        let scaler = Scaler {
            offset: self.scaling.offset.clone(),
            factor: self.scaling.factor.clone(),
        };
        let means = self
            .classes
            .iter()
            .flat_map(|c| c.mean_scaled.iter().copied())
            .collect();
        Ok(FittedClasses::from_means(
            feats, scaler, info.bands, means, self.beta,
        ))
    }
}
