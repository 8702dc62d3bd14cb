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
    /// The fit's means, k × dim in the scaled feature space, in the fit's own order.
    means: Vec<f64>,
    /// The soft assignment's β (None for hard k-means).
    pub(super) beta: Option<f64>,
    /// Class number (1..=k) of each of the fit's means.
    class_of: Vec<u8>,
    /// The fit's mean of each class number − 1 (the inverse of `class_of`).
    order: Vec<usize>,
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
        let data = Dataset::new(&scene.sample, dim, None)?;
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
        let mut class_of = vec![0u8; k];
        for (c, &j) in order.iter().enumerate() {
            class_of[j] = (c + 1) as u8;
        }
        let descriptions = scene.feature_descriptions();
        let areas = PixelAreas::new(&scene.info.geo, scene.info.width, scene.info.height);
        let classes = FittedClasses {
            feats: scene.feats,
            scaler: scene.scaler,
            bands: scene.info.bands,
            dim,
            k,
            means: model.means,
            beta: model.beta,
            class_of,
            order,
        };
        Ok(FittedScene {
            restart_check,
            undefined_index_pixels: scene.undefined_index_pixels,
            descriptions,
            areas,
            raster: scene.raster,
            info: scene.info,
            valid_pixels: scene.valid_pixels,
            total_pixels: scene.total_pixels,
            sample_pixels: scene.sample.len() / dim,
            classes,
        })
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
            .map(|p| {
                if ok[p] {
                    self.class_of[a.labels[p] as usize]
                } else {
                    0
                }
            })
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
        let j = self.order[class - 1];
        (0..self.dim)
            .map(|d| (scaled[d] as f64 - self.means[j * self.dim + d]).powi(2))
            .sum::<f64>()
    }
}
