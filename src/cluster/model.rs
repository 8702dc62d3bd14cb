//! Fitting: restarts of k-means++ and Lloyd, an optional soft phase, and the fitted model.

use super::hard::{assign_nearest, lloyd};
use super::init::kmeans_plus_plus;
use super::params::{Beta, Mode, ValidParams};
use super::soft::{auto_beta, soft_assign, soft_kmeans, SoftAssignment};
use super::Dataset;
use crate::error::{Error, ParamsError, Result};
use crate::rng::Rng;

/// A fitted k-means model: results only (the parameters live in [`ValidParams`]).
#[derive(Debug, Clone, PartialEq)]
pub struct KMeansModel {
    /// Features per mean.
    pub dim: usize,
    /// Means, `k × dim`, in the feature units. `k` may be below the requested K when
    /// the data has fewer distinct rows.
    pub means: Vec<f64>,
    /// Hard or soft.
    pub mode: Mode,
    /// β used for the soft phase (soft mode) or for uncertainty (hard mode), in
    /// 1/(feature unit)². `None` when the automatic β is infinite (every row on a mean).
    pub beta: Option<f64>,
    /// Weighted sum of squared distances from each row to its nearest final mean
    /// (the k-means objective; the meaning of scikit-learn's `inertia_`).
    pub sse: f64,
    /// Lloyd iterations of the kept restart.
    pub hard_iterations: usize,
    /// Soft iterations (0 in hard mode).
    pub soft_iterations: usize,
    /// Which restart was kept (0-based).
    pub restart: usize,
    /// Whether the final phase converged before its iteration cap.
    pub converged: bool,
}

impl KMeansModel {
    /// Number of means.
    pub fn k(&self) -> usize {
        self.means.len() / self.dim
    }
    /// Total iterations (hard + soft).
    pub fn iterations(&self) -> usize {
        self.hard_iterations + self.soft_iterations
    }
    /// Means as f32 (for distance work).
    pub fn means_f32(&self) -> Vec<f32> {
        self.means.iter().map(|&v| v as f32).collect()
    }
    /// Most probable cluster and normalised entropy of every row at the model's β.
    pub fn assign(&self, data: &Dataset) -> SoftAssignment {
        soft_assign(data, &self.means, self.beta)
    }
    /// Nearest mean of every row.
    pub fn predict(&self, data: &Dataset) -> Vec<u32> {
        assign_nearest(data, &self.means_f32()).0
    }
}

fn check_data(data: &Dataset) -> Result<()> {
    if data.is_empty() || data.total_weight() <= 0.0 {
        return Err(Error::Data(
            "no rows with positive weight to cluster".into(),
        ));
    }
    Ok(())
}

/// Fits k-means: `restarts` seeded k-means++ starts, each polished by Lloyd; the lowest
/// SSE is kept (the earliest on ties); in soft mode, soft k-means then starts from it.
pub fn fit(data: &Dataset, params: &ValidParams) -> Result<KMeansModel> {
    check_data(data)?;
    let mut best = None;
    for r in 0..params.restarts {
        let mut rng = Rng::new(params.seed, r as u64);
        let init = kmeans_plus_plus(data, params.k, &mut rng);
        let res = lloyd(
            data,
            &init,
            params.max_iter,
            params.tolerance,
            params.accelerate,
        );
        if best
            .as_ref()
            .is_none_or(|(_, b): &(usize, super::LloydResult)| res.sse < b.sse)
        {
            best = Some((r, res));
        }
    }
    let (restart, hard) = best.expect("at least one restart");
    Ok(finish(data, params, restart, hard))
}

/// Fits from given initial means (`k × dim`), skipping k-means++ and restarts.
pub fn fit_from(data: &Dataset, init: &[f32], params: &ValidParams) -> Result<KMeansModel> {
    check_data(data)?;
    if init.is_empty() || init.len() % data.dim() != 0 {
        return Err(ParamsError::BadInitialMeans {
            expected: params.k * data.dim(),
            got: init.len(),
        }
        .into());
    }
    let hard = lloyd(
        data,
        init,
        params.max_iter,
        params.tolerance,
        params.accelerate,
    );
    Ok(finish(data, params, 0, hard))
}

fn finish(
    data: &Dataset,
    params: &ValidParams,
    restart: usize,
    hard: super::LloydResult,
) -> KMeansModel {
    let beta = match params.beta {
        Beta::Fixed(b) => Some(b),
        Beta::Auto => auto_beta(hard.sse, data.total_weight(), data.dim()),
    };
    let mut model = KMeansModel {
        dim: data.dim(),
        means: hard.means,
        mode: params.mode,
        beta,
        sse: hard.sse,
        hard_iterations: hard.iterations,
        soft_iterations: 0,
        restart,
        converged: hard.converged,
    };
    if params.mode == Mode::Soft {
        if let Some(b) = beta {
            let soft = soft_kmeans(data, &model.means, b, params.max_iter, params.tolerance);
            model.means = soft.means;
            model.soft_iterations = soft.iterations;
            model.converged = soft.converged;
            model.sse = assign_nearest(data, &model.means_f32()).1;
        }
    }
    model
}
