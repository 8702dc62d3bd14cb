//! Deterministic annealing (Rose, Gurewitz & Fox 1990): soft k-means at a sharpness β
//! raised on a geometric schedule, each stage started from the last, so the means split
//! one phase transition at a time instead of depending on where k-means++ put them.
//!
//! Units. With r_ik ∝ exp(−β·½‖x_i − m_k‖²), all means sit at the data's centroid until
//! β passes the first critical value β_c = 1/λ_max, λ_max the largest variance along a
//! principal axis of the (weighted) data. The schedule's start and end are given as
//! multiples of β_c, so one default fits data of any scale; in CIELAB β itself is in
//! 1/ΔE*ab².
//!
//! Speed. Each stage runs on weighted centroids of grid cells half of 1/√β wide (the
//! scale the assignment can resolve at that β), never finer than a floor of σ_max/16
//! ([`Anneal::finest_cell`]); the result is then polished by hard Lloyd iterations on
//! every row (by the caller).
//!
//! Reallocation. Annealing splits its means in order of temperature, dense regions first,
//! and on photographs it often ends with several means on one dense region and one on a
//! wide sparse one, a local optimum Lloyd cannot leave. So after the last stage, up to
//! [`Anneal::split_merge`] split-and-merge moves ([`super::split_merge`]) run on the finest
//! grid summary; each is kept only if it lowers the SSE there.

use super::grid::coarsen;
use super::soft::soft_kmeans;
use super::split_merge::{split_merge, trial_stop};
use super::Dataset;
use crate::error::ParamsError;
use crate::rng::Rng;

/// The annealing schedule.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Anneal {
    /// First β, as a multiple of β_c = 1/λ_max. Default: 0.5 (all means together).
    pub start: f64,
    /// Last β, as a multiple of β_c. Default: 64 (near-hard at the scale of the clusters; the
    /// split-and-merge moves and the hard Lloyd polish finish the job, see DEVELOPERS.md).
    pub end: f64,
    /// Ratio between successive β. Default: 1.5 (with 10 iterations per stage: chosen by
    /// measurement on the benchmark photos, see DEVELOPERS.md).
    pub factor: f64,
    /// Most soft iterations per stage. Default: 10.
    pub stage_iter: usize,
    /// Side of the finest grid cell the stages run on, as a fraction of σ_max = √λ_max.
    /// Default: 1/16 (on the benchmark photos, 1/32 cost twice the time for an SSE
    /// within 0.05 %; see DEVELOPERS.md).
    pub finest_cell: f64,
    /// Most split-and-merge moves after the last stage (0: none). Default: 32.
    pub split_merge: usize,
}

impl Default for Anneal {
    fn default() -> Self {
        Anneal {
            start: 0.5,
            end: 64.0,
            factor: 1.5,
            stage_iter: 10,
            finest_cell: 1.0 / 16.0,
            split_merge: 32,
        }
    }
}

impl Anneal {
    /// Checks the schedule.
    pub fn check(&self) -> Result<(), ParamsError> {
        let positive = |v: f64| v.is_finite() && v > 0.0;
        let problem = if !positive(self.start) {
            Some(format!("start {} must be a positive number", self.start))
        } else if !(positive(self.end) && self.end > self.start) {
            Some(format!(
                "end {} must be a number above start {}",
                self.end, self.start
            ))
        } else if !(self.factor.is_finite() && self.factor > 1.0) {
            Some(format!("factor {} must be above 1", self.factor))
        } else if (self.end / self.start).ln() / self.factor.ln() > 10_000.0 {
            Some(format!(
                "from start {} to end {} by factor {} is more than 10000 stages",
                self.start, self.end, self.factor
            ))
        } else if self.stage_iter == 0 {
            Some("at least one iteration per stage is needed".to_string())
        } else if !positive(self.finest_cell) {
            Some(format!("finest cell {} must be positive", self.finest_cell))
        } else {
            None
        };
        match problem {
            None => Ok(()),
            Some(p) => Err(ParamsError::BadAnneal(p)),
        }
    }
}

/// What the annealing did.
#[derive(Debug, Clone, PartialEq)]
pub struct AnnealResult {
    /// Means after the last stage and the split-and-merge moves (which end with Lloyd on
    /// the finest grid summary), before the caller's hard polish on every row; `k × dim`.
    pub means: Vec<f64>,
    /// β_c = 1/λ_max of the data.
    pub beta_critical: f64,
    /// Stages run.
    pub stages: usize,
    /// Soft iterations over all stages.
    pub iterations: usize,
    /// Split-and-merge moves kept after the last stage.
    pub moves: usize,
}

/// Weighted mean and the largest eigenvalue of the weighted covariance (power iteration).
pub(crate) fn centroid_and_lambda_max(data: &Dataset) -> (Vec<f64>, f64) {
    let dim = data.dim();
    let total = data.total_weight();
    let mut mean = vec![0.0f64; dim];
    for i in 0..data.len() {
        let w = data.weight(i);
        for (m, &x) in mean.iter_mut().zip(data.row(i)) {
            *m += w * x as f64;
        }
    }
    mean.iter_mut().for_each(|m| *m /= total);
    let mut cov = vec![0.0f64; dim * dim];
    for i in 0..data.len() {
        let w = data.weight(i);
        let x = data.row(i);
        for a in 0..dim {
            let da = x[a] as f64 - mean[a];
            for b in 0..dim {
                cov[a * dim + b] += w * da * (x[b] as f64 - mean[b]);
            }
        }
    }
    cov.iter_mut().for_each(|c| *c /= total);
    let mut v = vec![1.0f64; dim];
    let mut lambda = 0.0;
    for _ in 0..200 {
        let mut nv = vec![0.0f64; dim];
        for a in 0..dim {
            for b in 0..dim {
                nv[a] += cov[a * dim + b] * v[b];
            }
        }
        let norm = nv.iter().map(|x| x * x).sum::<f64>().sqrt();
        if norm == 0.0 {
            break;
        }
        let next = norm / v.iter().map(|x| x * x).sum::<f64>().sqrt();
        v = nv.iter().map(|x| x / norm).collect();
        let done = (next - lambda).abs() <= 1e-12 * next;
        lambda = next;
        if done {
            break;
        }
    }
    (mean, lambda)
}

/// Anneals `k` means over `data` on `schedule`, seeded (the seed only sets the tiny
/// perturbations that let coincident means separate at each phase transition).
pub fn anneal(
    data: &Dataset,
    k: usize,
    schedule: &Anneal,
    seed: u64,
    tolerance: f64,
) -> AnnealResult {
    let dim = data.dim();
    let (centre, lambda) = centroid_and_lambda_max(data);
    let sigma = lambda.sqrt();
    let mut rng = Rng::new(seed, 0xA77E);
    let jitter = 1e-3 * sigma.max(f64::MIN_POSITIVE);
    let mut means: Vec<f64> = (0..k).flat_map(|_| centre.clone()).collect();
    if lambda.is_nan() || lambda <= 0.0 {
        // All rows equal: nothing to split.
        return AnnealResult {
            means,
            beta_critical: f64::INFINITY,
            stages: 0,
            iterations: 0,
            moves: 0,
        };
    }
    let beta_c = 1.0 / lambda;

    // Levels of grid summaries: the finest at σ·finest_cell, each next one twice as coarse.
    let floor_cell = sigma * schedule.finest_cell;
    let mut levels: Vec<(f64, Vec<f32>, Vec<f64>)> = Vec::new();
    let (r0, w0) = coarsen(data, floor_cell);
    levels.push((floor_cell, r0, w0));
    while levels.last().unwrap().0 < sigma && levels.last().unwrap().2.len() > 4 * k {
        let (cell, rows, weights) = levels.last().unwrap();
        let finer = Dataset::new(rows, dim, Some(weights)).expect("grid summary is valid");
        let (r, w) = coarsen(&finer, cell * 2.0);
        levels.push((cell * 2.0, r, w));
    }

    let mut beta = schedule.start * beta_c;
    let end = schedule.end * beta_c;
    let mut stages = 0;
    let mut iterations = 0;
    loop {
        // The coarsest level whose cells are at most half of 1/√β.
        let want = 0.5 / beta.sqrt();
        let level = levels
            .iter()
            .rev()
            .find(|(cell, _, _)| *cell <= want)
            .unwrap_or(&levels[0]);
        let stage_data =
            Dataset::new(&level.1, dim, Some(&level.2)).expect("grid summary is valid");
        for m in means.iter_mut() {
            *m += jitter * (2.0 * rng.uniform() - 1.0);
        }
        let r = soft_kmeans(&stage_data, &means, beta, schedule.stage_iter, tolerance);
        means = r.means;
        iterations += r.iterations;
        if crate::trace::enabled() {
            eprintln!(
                "chromasift: timing: annealing stage {stages}: β = {:.4} β_c, {} rows, {} iterations",
                beta / beta_c,
                stage_data.len(),
                r.iterations
            );
        }
        stages += 1;
        if beta >= end {
            break;
        }
        beta = (beta * schedule.factor).min(end);
    }
    let mut moves = 0;
    if schedule.split_merge > 0 {
        let finest =
            Dataset::new(&levels[0].1, dim, Some(&levels[0].2)).expect("grid summary is valid");
        let init: Vec<f32> = means.iter().map(|&v| v as f32).collect();
        let r = split_merge(&finest, &init, schedule.split_merge, trial_stop(tolerance));
        if crate::trace::enabled() {
            eprintln!(
                "chromasift: timing: annealing split-and-merge: {} moves, grid SSE {:.6e} -> {:.6e}",
                r.moves, r.start_sse, r.sse
            );
        }
        means = r.means.iter().map(|&v| v as f64).collect();
        moves = r.moves;
    }
    AnnealResult {
        means,
        beta_critical: beta_c,
        stages,
        iterations,
        moves,
    }
}
