//! The fit: k-means on the scene sample, class numbers by sample share, and the rule that
//! assigns any rows of raw pixels to the fitted classes.

use super::UNCERTAINTY_NODATA;
use crate::cluster::{fit, soft_assign, Dataset, ValidParams};
use crate::error::Result;
use crate::features::scene::{Features, Scaler, SceneSample};
use crate::raster::geotiff::{GeoRaster, PixelAreas, RasterInfo};
use rayon::prelude::*;

/// What pass 1 and the fit hand to pass 2: the raster still to be read, its counts and the
/// fitted classes.
pub(super) struct FittedScene {
    /// The open raster, read again strip by strip in pass 2.
    pub(super) raster: GeoRaster,
    pub(super) info: RasterInfo,
    /// Pixels that are not nodata.
    pub(super) valid_pixels: u64,
    pub(super) total_pixels: u64,
    /// Pixels in the sample the classes were fitted on.
    pub(super) sample_pixels: usize,
    /// Valid pixels with an undefined index.
    pub(super) undefined_index_pixels: u64,
    /// Each feature's band description (`None` for indices and bands without one).
    pub(super) descriptions: Vec<Option<String>>,
    /// Ground area of every pixel.
    pub(super) areas: PixelAreas,
    /// The second start's comparison with the kept solution, when one was made.
    pub(super) restart_check: Option<RestartCheck>,
    pub(super) classes: FittedClasses,
    /// What the fit said about the sample (none when the classes come from a saved model).
    pub(super) summary: Option<FitSummary>,
}

/// The fitted classes, numbered 1..=k by their share of the sample (largest first).
pub(super) struct FittedClasses {
    /// Feature extraction and scaling, as pass 1 chose them.
    feats: Features,
    scaler: Scaler,
    /// Bands per raw pixel.
    bands: usize,
    /// Features per pixel.
    pub(super) dim: usize,
    /// Number of classes.
    pub(super) k: usize,
    /// The means, k × dim in the scaled feature space, in class order (class 1 first).
    means: Vec<f64>,
    /// The soft assignment's β (None for hard k-means).
    pub(super) beta: Option<f64>,
}

/// Rows of pixels assigned to the classes.
pub(super) struct Assigned {
    /// Class number per pixel, 0 for nodata.
    pub(super) classes: Vec<u8>,
    /// Uncertainty (normalised entropy) per pixel, [`UNCERTAINTY_NODATA`] for nodata.
    pub(super) uncertainty: Vec<f32>,
    /// Scaled features, n × dim (zeros for nodata).
    pub(super) features: Vec<f32>,
}

/// Below this adjusted Rand index between the kept solution and a second start (Hubert &
/// Arabie 1985; 1 = the same partition), the two starts are said to disagree. Our own
/// choice: 0.8 separates "the same classes with a few boundary pixels moved" from a
/// different split.
pub const RESTART_AGREEMENT_MIN: f64 = 0.8;

/// A second start of the fit from another seed, compared with the kept solution on the
/// sample.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RestartCheck {
    /// Seed of the second start.
    pub seed: u64,
    /// Adjusted Rand index between the two partitions of the sample.
    pub ari: f64,
    /// SSE of the kept solution and of the second start, on the sample.
    pub sse: f64,
    pub sse_second: f64,
    /// True when `ari` < [`RESTART_AGREEMENT_MIN`].
    pub disagree: bool,
}

impl FittedScene {
    /// Fits k-means on the scene's sample and numbers the classes; the sample is dropped.
    /// With `second` (the same settings with another seed, one start), a second start is
    /// fitted and compared with the kept solution.
    pub(super) fn fit(
        scene: SceneSample,
        params: &ValidParams,
        second: Option<(u64, &ValidParams)>,
    ) -> Result<FittedScene> {
        let dim = scene.dim;
        let bands = scene.info.bands;
        let descriptions = scene.feature_descriptions();
        let areas = PixelAreas::new(&scene.info.geo, scene.info.width, scene.info.height);
        let (classes, summary) = FittedClasses::fit(
            &scene.sample,
            dim,
            scene.feats,
            scene.scaler,
            bands,
            params,
            second,
        )?;
        Ok(FittedScene {
            raster: scene.raster,
            info: scene.info,
            valid_pixels: scene.valid_pixels,
            total_pixels: scene.total_pixels,
            sample_pixels: scene.sample.len() / dim,
            undefined_index_pixels: scene.undefined_index_pixels,
            descriptions,
            areas,
            restart_check: summary.restart_check.clone(),
            classes,
            summary: Some(summary),
        })
    }
}

/// What the fit says about its own sample besides the classes.
pub(super) struct FitSummary {
    /// Rows of the sample in each class (index `class − 1`).
    pub(super) counts: Vec<u64>,
    /// The fit's SSE on the (scaled) sample.
    pub(super) sse: f64,
    /// The second start's comparison, when one was asked for.
    pub(super) restart_check: Option<RestartCheck>,
}

impl FittedClasses {
    /// Fits k-means on scaled `rows` (`n × dim`) and numbers the classes by their share of
    /// the rows, largest first (ties: the fit's own order).
    #[allow(clippy::too_many_arguments)]
    pub(super) fn fit(
        rows: &[f32],
        dim: usize,
        feats: Features,
        scaler: Scaler,
        bands: usize,
        params: &ValidParams,
        second: Option<(u64, &ValidParams)>,
    ) -> Result<(FittedClasses, FitSummary)> {
        let data = Dataset::new(rows, dim, None)?;
        let model = fit(&data, params)?;
        let restart_check = match second {
            Some((seed, p)) if model.k() > 1 => {
                let other = fit(&data, p)?;
                let ari = crate::cluster::adjusted_rand_index(
                    &model.predict(&data),
                    &other.predict(&data),
                );
                Some(RestartCheck {
                    seed,
                    ari,
                    sse: model.sse,
                    sse_second: other.sse,
                    disagree: ari < RESTART_AGREEMENT_MIN,
                })
            }
            _ => None,
        };
        let k = model.k();
        // Class numbers: largest share of the sample first.
        let mut counts = vec![0u64; k];
        for l in model.predict(&data) {
            counts[l as usize] += 1;
        }
        let mut order: Vec<usize> = (0..k).collect();
        order.sort_by(|&a, &b| counts[b].cmp(&counts[a]).then(a.cmp(&b)));
        let summary = FitSummary {
            counts: order.iter().map(|&j| counts[j]).collect(),
            sse: model.sse,
            restart_check,
        };
        // The means are kept in class order, so a saved model applied later computes
        // exactly what this run computes.
        let means = order
            .iter()
            .flat_map(|&j| model.means[j * dim..(j + 1) * dim].iter().copied())
            .collect();
        let classes = FittedClasses::from_means(feats, scaler, bands, means, model.beta);
        Ok((classes, summary))
    }

    /// Classes given whole, already numbered (`means` in class order, `k × dim`).
    pub(super) fn from_means(
        feats: Features,
        scaler: Scaler,
        bands: usize,
        means: Vec<f64>,
        beta: Option<f64>,
    ) -> FittedClasses {
        let dim = feats.dim();
        let k = means.len() / dim;
        FittedClasses {
            feats,
            scaler,
            bands,
            dim,
            k,
            means,
            beta,
        }
    }

    /// The means in class order (`k × dim`, scaled features).
    pub(super) fn means_by_class(&self) -> &[f64] {
        &self.means
    }

    /// The scaling applied to features before the means.
    pub(super) fn scaler(&self) -> &Scaler {
        &self.scaler
    }
}

impl FittedClasses {
    /// How pixels become features (band numbers, names, nodata).
    pub(super) fn features(&self) -> &Features {
        &self.feats
    }

    /// Assigns rows of raw pixels (pixel-interleaved bands) to the classes.
    pub(super) fn assign_rows(&self, raw: &[f32]) -> Assigned {
        let (bands, dim) = (self.bands, self.dim);
        let n = raw.len() / bands;
        let mut feat = vec![0.0f32; n * dim];
        let mut ok = vec![false; n];
        feat.par_chunks_mut(dim)
            .zip(ok.par_iter_mut())
            .enumerate()
            .with_min_len(1024)
            .for_each(|(p, (f, o))| {
                *o = self.feats.extract(&raw[p * bands..(p + 1) * bands], f);
                if *o {
                    self.scaler.apply(f);
                } else {
                    f.iter_mut().for_each(|v| *v = 0.0);
                }
            });
        let ds = Dataset::new(&feat, dim, None).expect("finite features");
        let a = soft_assign(&ds, &self.means, self.beta);
        let classes = (0..n)
            .map(|p| if ok[p] { (a.labels[p] + 1) as u8 } else { 0 })
            .collect();
        let uncertainty = (0..n)
            .map(|p| {
                if ok[p] {
                    a.entropy[p]
                } else {
                    UNCERTAINTY_NODATA
                }
            })
            .collect();
        Assigned {
            classes,
            uncertainty,
            features: feat,
        }
    }

    /// Unscaled features of pixel `p` of `raw` into `out` (in the features' own units).
    pub(super) fn unscaled_features(&self, raw: &[f32], p: usize, out: &mut [f32]) {
        self.feats
            .extract(&raw[p * self.bands..(p + 1) * self.bands], out);
    }

    /// Squared distance of scaled features to the mean of class number `class` (1..=k).
    pub(super) fn squared_distance(&self, class: usize, scaled: &[f32]) -> f64 {
        let j = class - 1;
        (0..self.dim)
            .map(|d| (scaled[d] as f64 - self.means[j * self.dim + d]).powi(2))
            .sum::<f64>()
    }
}
