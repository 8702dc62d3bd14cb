//! Fitting: restarts of k-means++ and Lloyd, an optional soft phase, and the fitted model.

use super::anneal::anneal;
use super::grid::coarsen;
use super::hard::{assign_nearest, lloyd, Stop};
use super::init::kmeans_plus_plus;
use super::params::{Beta, Mode, ValidParams};
use super::refine::refine_means;
use super::soft::{auto_beta, soft_assign, soft_kmeans_fixed, SoftAssignment};
use super::Dataset;
use crate::error::{Error, ParamsError, Result};
use crate::rng::Rng;

/// Generator streams of the refinement: this bit plus the restart number (k-means++ uses
/// the restart number alone).
pub(super) const REFINE_STREAM: u64 = 1 << 32;

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

/// The stopping rule of the hard phase that `params` ask for.
pub fn stop_rule(params: &ValidParams) -> Stop {
    Stop {
        max_iter: params.engine.max_iter,
        tolerance: params.engine.tolerance,
        shift_tolerance: params.engine.shift_tolerance,
    }
}

/// Fits k-means: `restarts` seeded k-means++ starts (or annealing runs, with
/// `params.engine.anneal`), each refined by `params.engine.refine` (on a grid summary of the rows) and
/// polished by Lloyd on every row; the lowest SSE is kept (the earliest on ties); in soft
/// mode, soft k-means then starts from it.
pub fn fit(data: &Dataset, params: &ValidParams) -> Result<KMeansModel> {
    let (restart, hard) = fit_hard(data, params)?;
    Ok(finish(data, params, restart, hard))
}

/// Checks pinned means against the data and K: their number of means.
fn pinned_count(data: &Dataset, params: &ValidParams) -> Result<usize> {
    let dim = data.dim();
    if params.pinned.len() % dim != 0 {
        return Err(ParamsError::BadPinned(format!(
            "{} values do not make whole means of {dim}",
            params.pinned.len()
        ))
        .into());
    }
    let p = params.pinned.len() / dim;
    if p > params.k {
        return Err(ParamsError::BadPinned(format!(
            "{p} pinned but k is {}; pinned colours count toward k",
            params.k
        ))
        .into());
    }
    Ok(p)
}

/// The hard phase of [`fit`]: which start was kept and its Lloyd result, before any soft
/// phase. With pinned means, every start extends them by k-means++ and Lloyd keeps them
/// fixed, and no refinement or split-and-merge move runs (they would move the pinned
/// means).
pub fn fit_hard(data: &Dataset, params: &ValidParams) -> Result<(usize, super::LloydResult)> {
    check_data(data)?;
    let pinned = pinned_count(data, params)?;
    if pinned > 0 {
        let start: Vec<f32> = params.pinned.iter().map(|&v| v as f32).collect();
        let mut best: Option<(usize, super::LloydResult)> = None;
        for r in 0..params.engine.restarts {
            let mut rng = Rng::new(params.engine.seed, r as u64);
            let init = super::init::kmeans_plus_plus_from(data, &start, params.k, &mut rng);
            let res =
                super::hard::lloyd_fixed(data, &init, pinned, stop_rule(params), params.accelerate);
            if best.as_ref().is_none_or(|(_, b)| res.sse < b.sse) {
                best = Some((r, res));
            }
        }
        return Ok(best.expect("at least one restart"));
    }
    // Split-and-merge moves after k-means++ starts run on the grid summary annealing's
    // last stage uses (cells σ_max/16 wide), built once for all restarts.
    let grid = (params.engine.anneal.is_none() && params.engine.split_merge > 0).then(|| {
        let mut ph = crate::trace::Phases::start("fit");
        let sigma = super::anneal::centroid_and_lambda_max(data).1.sqrt();
        ph.mark("principal axis");
        let grid = coarsen(data, sigma * super::Anneal::default().finest_cell);
        ph.mark("grid summary");
        grid
    });
    // The refinement runs on its own grid summary, when that is at most half the rows.
    let refine = params.engine.anneal.is_none() && !params.engine.refine.is_none();
    let refine_grid = if refine {
        let mut ph = crate::trace::Phases::start("fit");
        let g = refine_summary(data, params.k);
        ph.mark("refinement summary");
        g
    } else {
        None
    };
    let summary = refine_grid
        .as_ref()
        .and_then(|(rows, weights)| Dataset::new(rows, data.dim(), Some(weights)).ok());
    let mut best = None;
    for r in 0..params.engine.restarts {
        let mut ph = crate::trace::Phases::start("fit");
        let init = match &params.engine.anneal {
            Some(schedule) => {
                let a = anneal(
                    data,
                    params.k,
                    schedule,
                    params.engine.seed ^ r as u64,
                    params.engine.tolerance,
                );
                ph.mark("annealing");
                a.means.iter().map(|&v| v as f32).collect()
            }
            None => {
                let mut rng = Rng::new(params.engine.seed, r as u64);
                let mut init = kmeans_plus_plus(data, params.k, &mut rng);
                ph.mark("k-means++");
                if refine && init.len() / data.dim() >= 2 {
                    // Its own generator stream per start, apart from k-means++'s.
                    let mut rng = Rng::new(params.engine.seed, REFINE_STREAM | r as u64);
                    let on = summary.as_ref().unwrap_or(data);
                    init = refine_means(
                        on,
                        &init,
                        params.engine.refine,
                        params.engine.tolerance,
                        &mut rng,
                    )
                    .means;
                    ph.mark("refinement");
                }
                match &grid {
                    Some((rows, weights)) if params.engine.split_merge > 0 => {
                        let moved = super::split_merge::moves_on_grid(
                            rows,
                            weights,
                            data.dim(),
                            &init,
                            params.engine.split_merge,
                            params.engine.tolerance,
                        );
                        ph.mark("split-and-merge");
                        moved
                    }
                    _ => init,
                }
            }
        };
        let res = lloyd(data, &init, stop_rule(params), params.accelerate);
        ph.mark("lloyd");
        if best
            .as_ref()
            .is_none_or(|(_, b): &(usize, super::LloydResult)| res.sse < b.sse)
        {
            best = Some((r, res));
        }
    }
    Ok(best.expect("at least one restart"))
}

/// The grid summary (rows, weights) the refinement of a K-means fit runs on, when it is
/// at most half the rows.
pub(super) fn refine_summary(data: &Dataset, k: usize) -> Option<(Vec<f32>, Vec<f64>)> {
    Some(coarsen(data, refine_cell(data, k)))
        .filter(|(rows, _)| rows.len() * 2 <= data.rows().len())
}

/// Side of the grid cells the refinement runs on: σ_max / (F · k^(1/dim)), σ_max² the
/// largest variance along a principal axis of the rows. The clusters of k equal parts of
/// the data span about σ_max / k^(1/dim) along that axis, so each is summarised by some
/// F^dim cells whatever K and the dimension (F = 8 by default, see DEVELOPERS.md,
/// "Global refinement").
fn refine_cell(data: &Dataset, k: usize) -> f64 {
    let sigma = super::anneal::centroid_and_lambda_max(data).1.sqrt();
    sigma / (REFINE_CELLS * (k.max(1) as f64).powf(1.0 / data.dim() as f64))
}

/// F of [`refine_cell`].
const REFINE_CELLS: f64 = 8.0;

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
    let hard = lloyd(data, init, stop_rule(params), params.accelerate);
    Ok(finish(data, params, 0, hard))
}

/// The model of a finished hard fit (`restart` records which start it came from): β
/// resolved, and in soft mode the soft phase run from its means.
pub fn finish(
    data: &Dataset,
    params: &ValidParams,
    restart: usize,
    hard: super::LloydResult,
) -> KMeansModel {
    let beta = match params.engine.beta {
        Beta::Fixed(b) => Some(b),
        Beta::Auto => auto_beta(hard.sse, data.total_weight(), data.dim()),
    };
    let mut model = KMeansModel {
        dim: data.dim(),
        means: hard.means,
        mode: params.engine.mode,
        beta,
        sse: hard.sse,
        hard_iterations: hard.iterations,
        soft_iterations: 0,
        restart,
        converged: hard.converged,
    };
    if params.engine.mode == Mode::Soft {
        if let Some(b) = beta {
            // Most soft iterations run on a coarse summary of the rows (weighted centroids of
            // grid cells half of σ = 1/√β wide, below the assignment's own scale), then the
            // full rows polish the result to the tolerance (a few iterations: on a 12 MP
            // photo, 73 coarse iterations on 28 k cells, then 6 on 587 k colours).
            let mut start = model.means.clone();
            let mut coarse_iterations = 0;
            let fixed = params.pinned.len() / data.dim();
            let (crows, cweights) = coarsen(data, 0.5 / b.sqrt());
            if crows.len() * 2 <= data.rows().len() {
                if let Ok(cdata) = Dataset::new(&crows, data.dim(), Some(&cweights)) {
                    let c = soft_kmeans_fixed(
                        &cdata,
                        &start,
                        fixed,
                        b,
                        params.engine.max_iter,
                        params.engine.tolerance,
                    );
                    start = c.means;
                    coarse_iterations = c.iterations;
                }
            }
            let soft = soft_kmeans_fixed(
                data,
                &start,
                fixed,
                b,
                params.engine.max_iter,
                params.engine.tolerance,
            );
            model.means = soft.means;
            model.soft_iterations = coarse_iterations + soft.iterations;
            model.converged = soft.converged;
            model.sse = assign_nearest(data, &model.means_f32()).1;
        }
    }
    model
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The grid summary as a map from cell key to running sums, in key order: the
    /// definition `coarsen` must reproduce bit for bit.
    fn coarsen_by_map(data: &Dataset, cell: f64) -> (Vec<f32>, Vec<f64>) {
        let dim = data.dim();
        let mut cells: std::collections::BTreeMap<Vec<i64>, (f64, Vec<f64>)> =
            std::collections::BTreeMap::new();
        for i in 0..data.len() {
            let w = data.weight(i);
            if w == 0.0 {
                continue;
            }
            let x = data.row(i);
            let key: Vec<i64> = x
                .iter()
                .map(|&v| (v as f64 / cell).floor() as i64)
                .collect();
            let e = cells.entry(key).or_insert_with(|| (0.0, vec![0.0; dim]));
            e.0 += w;
            for (s, &v) in e.1.iter_mut().zip(x) {
                *s += w * v as f64;
            }
        }
        let mut rows = Vec::new();
        let mut weights = Vec::new();
        for (_, (w, s)) in cells {
            rows.extend(s.iter().map(|v| (v / w) as f32));
            weights.push(w);
        }
        (rows, weights)
    }

    #[test]
    fn coarsen_matches_a_map_of_cells() {
        let mut r = Rng::new(17, 0);
        // (dim, spread, cell): packed keys for the first four (a few cells of many rows
        // each, then mostly single rows), the slice-order fallback for the last two (keys
        // spanning more than 64 bits in all).
        for (dim, spread, cell) in [
            (1, 50.0, 0.7),
            (3, 10.0, 1.5),
            (3, 100.0, 1.5),
            (5, 100.0, 0.5),
            (5, 1000.0, 0.01),
            (4, 3.0e7, 1e-3),
        ] {
            let n = 3000;
            let rows: Vec<f32> = (0..n * dim)
                .map(|_| ((r.uniform() - 0.5) * spread) as f32)
                .collect();
            let weights: Vec<f64> = (0..n).map(|_| r.below(4) as f64).collect();
            let data = Dataset::new(&rows, dim, Some(&weights)).unwrap();
            let got = coarsen(&data, cell);
            let want = coarsen_by_map(&data, cell);
            assert_eq!(got.1.len(), want.1.len(), "dim {dim}");
            assert!(got.0 == want.0 && got.1 == want.1, "dim {dim}");
        }
    }
}
