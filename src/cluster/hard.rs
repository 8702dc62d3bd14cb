//! Hard k-means: weighted Lloyd iterations, optionally accelerated with Hamerly (2010)
//! distance bounds. Both paths make the same decisions and give the same result.

use super::bounds::Moves;
use super::{dist2, nearest_two, nearest_two_by_dim, Dataset, MeansByDim, CHUNK};
use rayon::prelude::*;
use std::sync::atomic::{AtomicUsize, Ordering::Relaxed};

/// Relative safety margin on bound tests, far above f32 rounding of distances, so a
/// skipped row is one whose nearest mean is certain.
const BOUND_MARGIN: f64 = 1e-5;

/// Outcome of [`lloyd`].
#[derive(Debug, Clone, PartialEq)]
pub struct LloydResult {
    /// Final means, `k × dim`.
    pub means: Vec<f64>,
    /// Nearest final mean of each row.
    pub labels: Vec<u32>,
    /// Weighted sum of squared distances to the nearest final mean.
    pub sse: f64,
    /// Lloyd iterations run (mean updates).
    pub iterations: usize,
    /// True when it stopped on no change or the tolerance, not the iteration cap.
    pub converged: bool,
}

fn to_f32(means: &[f64]) -> Vec<f32> {
    means.iter().map(|&v| v as f32).collect()
}

/// Nearest mean of every row and the weighted SSE (sum over chunks in chunk order).
pub fn assign_nearest(data: &Dataset, means: &[f32]) -> (Vec<u32>, f64) {
    let by_dim = MeansByDim::new(means, data.dim());
    let mut labels = vec![0u32; data.len()];
    let partial: Vec<f64> = labels
        .par_chunks_mut(CHUNK)
        .enumerate()
        .map(|(c, out)| {
            let mut s = 0.0f64;
            for (o, l) in out.iter_mut().enumerate() {
                let i = c * CHUNK + o;
                let (b, d1, _) = nearest_two_by_dim(data.row(i), &by_dim);
                *l = b as u32;
                s += data.weight(i) * d1 as f64;
            }
            s
        })
        .collect();
    (labels, partial.iter().sum())
}

/// Per-cluster sufficient statistics, `dim + 3` values each: weight, Σw‖x‖², Σw·x, and
/// the number of rows of non-zero weight (exact, so a cluster left by all its rows is
/// known to be empty even when its weights do not cancel to exactly zero).
struct Stats {
    k: usize,
    dim: usize,
    v: Vec<f64>,
}

impl Stats {
    fn stride(&self) -> usize {
        self.dim + 3
    }
    fn rows(&self, j: usize) -> f64 {
        self.v[(j + 1) * self.stride() - 1]
    }
    /// Weight of cluster `j`; exactly 0 when it has no rows.
    fn weight(&self, j: usize) -> f64 {
        if self.rows(j) < 0.5 {
            0.0
        } else {
            self.v[j * self.stride()]
        }
    }
    /// Adds the changes `delta` (same shape) made by one pass.
    fn apply(&mut self, delta: &Stats) {
        for (a, b) in self.v.iter_mut().zip(&delta.v) {
            *a += b;
        }
    }
    fn sse(&self) -> f64 {
        let s = self.stride();
        (0..self.k)
            .map(|j| {
                let w = self.weight(j);
                if w <= 0.0 {
                    return 0.0;
                }
                let q = self.v[j * s + 1];
                let norm: f64 = self.v[j * s + 2..(j + 1) * s - 1]
                    .iter()
                    .map(|x| x * x)
                    .sum();
                (q - norm / w).max(0.0)
            })
            .sum()
    }
}

/// Adds row `x` (weight `w`) to the per-cluster statistics `v` under label `l`; a
/// negative `w` takes it out again (every term is then the exact negation).
#[inline(always)]
fn add_row(v: &mut [f64], stride: usize, l: usize, x: &[f32], w: f64) {
    if w == 0.0 {
        return;
    }
    let base = l * stride;
    v[base] += w;
    v[base + stride - 1] += if w > 0.0 { 1.0 } else { -1.0 };
    let mut q = 0.0f64;
    for (d, &xv) in x.iter().enumerate() {
        let xv = xv as f64;
        q += xv * xv;
        v[base + 2 + d] += w * xv;
    }
    v[base + 1] += w * q;
}

/// Sums per-chunk results in chunk order (deterministic whatever the thread count).
fn combine(parts: Vec<(usize, Vec<f64>)>, k: usize, dim: usize) -> (usize, Stats) {
    let mut v = vec![0.0f64; k * (dim + 3)];
    let mut changed = 0;
    for (c, p) in parts {
        changed += c;
        for (a, b) in v.iter_mut().zip(p) {
            *a += b;
        }
    }
    (changed, Stats { k, dim, v })
}

/// Full assignment with bounds: labels, upper = distance to own mean, lower = to second.
/// Returns the number of rows that changed cluster and the change to the statistics
/// (each moved row taken out of its old cluster, if it had one, and added to the new).
fn full_pass(
    data: &Dataset,
    means: &[f32],
    labels: &mut [u32],
    upper: &mut [f64],
    lower: &mut [f64],
) -> (usize, Stats) {
    match data.dim() {
        1 => full_pass_dim(data, 1, means, labels, upper, lower),
        2 => full_pass_dim(data, 2, means, labels, upper, lower),
        3 => full_pass_dim(data, 3, means, labels, upper, lower),
        4 => full_pass_dim(data, 4, means, labels, upper, lower),
        d => full_pass_dim(data, d, means, labels, upper, lower),
    }
}

#[inline(always)]
fn full_pass_dim(
    data: &Dataset,
    dim: usize,
    means: &[f32],
    labels: &mut [u32],
    upper: &mut [f64],
    lower: &mut [f64],
) -> (usize, Stats) {
    let rows = data.rows();
    let k = means.len() / dim;
    let stride = dim + 3;
    let by_dim = MeansByDim::new(means, dim);
    let parts: Vec<(usize, Vec<f64>)> = labels
        .par_chunks_mut(CHUNK)
        .zip(upper.par_chunks_mut(CHUNK))
        .zip(lower.par_chunks_mut(CHUNK))
        .enumerate()
        .map(|(c, ((ls, us), lo))| {
            let mut changed = 0usize;
            let mut v = vec![0.0f64; k * stride];
            for o in 0..ls.len() {
                let i = c * CHUNK + o;
                let x = &rows[i * dim..(i + 1) * dim];
                let (b, d1, d2) = nearest_two_by_dim(x, &by_dim);
                let was = ls[o];
                if b as u32 != was {
                    changed += 1;
                    let w = data.weight(i);
                    if was != u32::MAX {
                        add_row(&mut v, stride, was as usize, x, -w);
                    }
                    add_row(&mut v, stride, b, x, w);
                }
                ls[o] = b as u32;
                us[o] = (d1 as f64).sqrt();
                lo[o] = (d2 as f64).sqrt();
            }
            (changed, v)
        })
        .collect();
    combine(parts, k, dim)
}

/// One pass that widens each row's bounds by the moves of the means since the last full
/// pass and skips rows whose bounds prove the current mean is nearest (Hamerly 2010). Only rows
/// that change cluster touch the statistics. Returns (rows changed, change to the
/// statistics).
fn bounded_pass(
    data: &Dataset,
    means: &[f32],
    moves: &Moves,
    labels: &mut [u32],
    upper: &mut [f64],
    lower: &mut [f64],
) -> (usize, Stats) {
    // The body is inlined with the dimension as a constant for the common sizes, so
    // its per-row loops are unrolled (same arithmetic in the same order).
    match data.dim() {
        1 => bounded_pass_dim(data, 1, means, moves, labels, upper, lower),
        2 => bounded_pass_dim(data, 2, means, moves, labels, upper, lower),
        3 => bounded_pass_dim(data, 3, means, moves, labels, upper, lower),
        4 => bounded_pass_dim(data, 4, means, moves, labels, upper, lower),
        5 => bounded_pass_dim(data, 5, means, moves, labels, upper, lower),
        6 => bounded_pass_dim(data, 6, means, moves, labels, upper, lower),
        d => bounded_pass_dim(data, d, means, moves, labels, upper, lower),
    }
}

// Kernel twin of `full_pass_dim` (deliberate): the same loop skeleton, with the bound
// tests in front. Kept as two functions so that the full pass carries no bound branches
// in its inner loop; both are instantiated per dimension for the compiler to unroll.
#[inline(always)]
fn bounded_pass_dim(
    data: &Dataset,
    dim: usize,
    means: &[f32],
    moves: &Moves,
    labels: &mut [u32],
    upper: &mut [f64],
    lower: &mut [f64],
) -> (usize, Stats) {
    let rows = data.rows();
    let k = means.len() / dim;
    let stride = dim + 3;
    let by_dim = MeansByDim::new(means, dim);
    let parts: Vec<(usize, Vec<f64>)> = labels
        .par_chunks_mut(CHUNK)
        .zip(upper.par_chunks_mut(CHUNK))
        .zip(lower.par_chunks_mut(CHUNK))
        .enumerate()
        .map(|(c, ((ls, us), lo))| {
            let mut changed = 0usize;
            let mut by_own = 0usize;
            let mut v = vec![0.0f64; k * stride];
            // First a tight loop that only tests the bounds and lists the rows they do not
            // settle (most rows, after the first few passes, are settled here); then the
            // listed rows only. Stored bounds are net of the sums since the last full pass.
            const { assert!(CHUNK <= 1 << 16, "row offsets in a chunk must fit in u16") };
            let mut todo = [0u16; CHUNK];
            let mut n_todo = 0usize;
            for o in 0..ls.len() {
                let a = ls[o] as usize;
                let upper = us[o] + moves.up[a];
                let lower = lo[o] - moves.down[a];
                let m = moves.half_gap[a].max(lower) * (1.0 - BOUND_MARGIN);
                // Listed unless the bounds prove it (a NaN fails the proof).
                #[allow(clippy::neg_cmp_op_on_partial_ord)]
                let unsettled = !(upper < m);
                todo[n_todo] = o as u16;
                n_todo += usize::from(unsettled);
            }
            let by_bounds = ls.len() - n_todo;
            for &o in &todo[..n_todo] {
                let o = o as usize;
                let i = c * CHUNK + o;
                let a = ls[o] as usize;
                let x = &rows[i * dim..(i + 1) * dim];
                let lower = lo[o] - moves.down[a];
                let m = moves.half_gap[a].max(lower) * (1.0 - BOUND_MARGIN);
                // Compared squared (m ≥ 0), so the branch does not wait for the root.
                let own2 = dist2(x, &means[a * dim..(a + 1) * dim]) as f64;
                if own2 < m * m {
                    by_own += 1;
                    us[o] = own2.sqrt() - moves.up[a];
                    continue;
                }
                let (b, d1, d2) = nearest_two_by_dim(x, &by_dim);
                if b != a {
                    changed += 1;
                    let w = data.weight(i);
                    add_row(&mut v, stride, a, x, -w);
                    add_row(&mut v, stride, b, x, w);
                }
                ls[o] = b as u32;
                us[o] = (d1 as f64).sqrt() - moves.up[b];
                lo[o] = (d2 as f64).sqrt() + moves.down[b];
            }
            if crate::trace::enabled() {
                SKIPS[0].fetch_add(by_bounds, Relaxed);
                SKIPS[1].fetch_add(by_own, Relaxed);
                SKIPS[2].fetch_add(ls.len() - by_bounds - by_own, Relaxed);
            }
            (changed, v)
        })
        .collect();
    combine(parts, k, dim)
}

/// Rows of bounded passes settled by the bounds alone, by the distance to their own mean,
/// and by a full search (counted only when timings are on, for contributors).
static SKIPS: [AtomicUsize; 3] = [
    AtomicUsize::new(0),
    AtomicUsize::new(0),
    AtomicUsize::new(0),
];

/// Replaces the mean of each empty cluster by the row worst served by the other
/// means (largest squared distance to its nearest mean; lowest index on ties).
fn reseed_empty(data: &Dataset, means: &mut [f64], empty: &[usize]) {
    let dim = data.dim();
    let k = means.len() / dim;
    let mut live: Vec<bool> = vec![true; k];
    for &e in empty {
        live[e] = false;
    }
    for &e in empty {
        let live_means: Vec<f32> = (0..k)
            .filter(|&j| live[j])
            .flat_map(|j| means[j * dim..(j + 1) * dim].iter().map(|&v| v as f32))
            .collect();
        let worst = (0..data.len())
            .into_par_iter()
            .with_min_len(CHUNK)
            .filter(|&i| data.weight(i) > 0.0)
            .map(|i| {
                let d = if live_means.is_empty() {
                    0.0
                } else {
                    nearest_two(data.row(i), &live_means, dim).1
                };
                (d, i)
            })
            .reduce(
                || (f32::NEG_INFINITY, usize::MAX),
                |a, b| {
                    if b.0 > a.0 || (b.0 == a.0 && b.1 < a.1) {
                        b
                    } else {
                        a
                    }
                },
            );
        if worst.1 != usize::MAX {
            for (d, v) in data.row(worst.1).iter().enumerate() {
                means[e * dim + d] = *v as f64;
            }
        }
        live[e] = true;
    }
}

/// When [`lloyd`] stops.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Stop {
    /// Most mean updates.
    pub max_iter: usize,
    /// Stop when one iteration lowers the SSE by at most this fraction of it.
    pub tolerance: f64,
    /// Stop when the summed squared moves of all means in one update are at most this
    /// times the mean per-dimension weighted variance of the data. 0 turns the rule off.
    pub shift_tolerance: f64,
}

impl Stop {
    /// Run to no change (or `max_iter`): both tolerances off.
    pub fn exact(max_iter: usize) -> Stop {
        Stop {
            max_iter,
            tolerance: 0.0,
            shift_tolerance: 0.0,
        }
    }
}

/// Mean over dimensions of the weighted variance of the rows.
fn mean_variance(data: &Dataset) -> f64 {
    let dim = data.dim();
    let total = data.total_weight();
    if total <= 0.0 {
        return 0.0;
    }
    let stats = combine(
        data.rows()
            .par_chunks(CHUNK * dim)
            .enumerate()
            .map(|(c, rows)| {
                let mut v = vec![0.0f64; dim + 3];
                for (o, x) in rows.chunks_exact(dim).enumerate() {
                    add_row(&mut v, dim + 3, 0, x, data.weight(c * CHUNK + o));
                }
                (0, v)
            })
            .collect(),
        1,
        dim,
    )
    .1;
    stats.sse() / total / dim as f64
}

/// Weighted Lloyd iterations from `init` (`k × dim`) until no row changes cluster or a
/// rule of `stop` holds. With `accelerate`, Hamerly bounds skip distance work; the
/// result is the same.
pub fn lloyd(data: &Dataset, init: &[f32], stop: Stop, accelerate: bool) -> LloydResult {
    lloyd_fixed(data, init, 0, stop, accelerate)
}

/// As [`lloyd`], with the first `fixed` means of `init` held where they are: they take
/// rows as any mean does but are never moved (pinned colours). A fixed mean that no row
/// is nearest to stays too; only the others are reseeded when empty.
pub fn lloyd_fixed(
    data: &Dataset,
    init: &[f32],
    fixed: usize,
    stop: Stop,
    accelerate: bool,
) -> LloydResult {
    lloyd_run(data, init, fixed, stop, accelerate, None)
        .expect("a run without a mark to beat is never abandoned")
}

/// How much faster than its last step a trial's SSE is allowed to keep falling before
/// [`lloyd_trial`] gives it up: a trial is abandoned when even `ABANDON_FACTOR` times
/// its last decrease, repeated for every pass it has left, would not take it below the
/// mark. Lloyd's decreases usually shrink from pass to pass; measured on every
/// split-and-merge trial of the 9 test photographs at K = 4, 8, 16 and 32, 20 2 MP
/// frames, and the generated sets of `refine_study` at 20 seeds (3086 trials, 380 of
/// them kept), a factor of 3 abandoned no trial that went on to beat its mark, and
/// saved about 31 % of the trials' passes (1 abandoned a winning trial once, 2 as well;
/// DEVELOPERS.md, "Global refinement").
pub(crate) const ABANDON_FACTOR: f64 = 3.0;

/// A trial of the global refinement: Lloyd as [`lloyd`] (accelerated), given up as soon
/// as its SSE cannot fall below `mark` by the rule of [`ABANDON_FACTOR`] (`None`). A trial
/// that is not given up returns its result whatever its SSE.
#[cfg(test)]
pub(crate) fn lloyd_trial(
    data: &Dataset,
    init: &[f32],
    stop: Stop,
    mark: f64,
) -> Option<LloydResult> {
    lloyd_run(data, init, 0, stop, true, Some(mark))
}

/// The shift limit of [`Stop::shift_tolerance`] on `data`: what every run with `stop`
/// computes first (one pass over the rows), computed once for many trials.
pub(crate) fn shift_limit(data: &Dataset, stop: Stop) -> f64 {
    if stop.shift_tolerance > 0.0 {
        stop.shift_tolerance * mean_variance(data)
    } else {
        -1.0
    }
}

/// As [`lloyd_trial`], when the caller already knows each row's nearest mean under
/// `init`: `nearest(i, row)` gives what a full search over `init` would (the index, the
/// lowest on ties, and the squared distance), and a squared distance no greater than the
/// second-nearest's. The labels and statistics are then those of a full first pass, so
/// the result is bit for bit [`lloyd_trial`]'s; only the first pass's search is saved.
/// `shift_limit` is [`shift_limit`] of `data` and `stop`.
pub(crate) fn lloyd_trial_from<F>(
    data: &Dataset,
    init: &[f32],
    stop: Stop,
    mark: f64,
    shift_limit: f64,
    nearest: F,
) -> Option<LloydResult>
where
    F: Fn(usize, &[f32]) -> (usize, f32, f32) + Sync,
{
    let k = init.len() / data.dim();
    let first = seeded_pass(data, k, nearest);
    lloyd_core(data, init, 0, stop, true, Some(mark), shift_limit, first)
}

/// The state after a first pass: labels, bounds and the clusters' statistics.
struct First {
    labels: Vec<u32>,
    upper: Vec<f64>,
    lower: Vec<f64>,
    stats: Stats,
}

/// A first pass whose nearest means come from `nearest`: the same chunks, order of
/// additions and bounds as [`full_pass`] from no labels.
fn seeded_pass<F>(data: &Dataset, k: usize, nearest: F) -> First
where
    F: Fn(usize, &[f32]) -> (usize, f32, f32) + Sync,
{
    let dim = data.dim();
    let stride = dim + 3;
    let n = data.len();
    let mut labels = vec![0u32; n];
    let mut upper = vec![0.0f64; n];
    let mut lower = vec![0.0f64; n];
    let parts: Vec<(usize, Vec<f64>)> = labels
        .par_chunks_mut(CHUNK)
        .zip(upper.par_chunks_mut(CHUNK))
        .zip(lower.par_chunks_mut(CHUNK))
        .enumerate()
        .map(|(c, ((ls, us), lo))| {
            let mut v = vec![0.0f64; k * stride];
            for o in 0..ls.len() {
                let i = c * CHUNK + o;
                let x = data.row(i);
                let (b, d1, d2) = nearest(i, x);
                add_row(&mut v, stride, b, x, data.weight(i));
                ls[o] = b as u32;
                us[o] = (d1 as f64).sqrt();
                lo[o] = (d2 as f64).sqrt();
            }
            (ls.len(), v)
        })
        .collect();
    First {
        labels,
        upper,
        lower,
        stats: combine(parts, k, dim).1,
    }
}

fn lloyd_run(
    data: &Dataset,
    init: &[f32],
    fixed: usize,
    stop: Stop,
    accelerate: bool,
    mark: Option<f64>,
) -> Option<LloydResult> {
    let n = data.len();
    let shift_limit = shift_limit(data, stop);
    let mut labels = vec![u32::MAX; n];
    let mut upper = vec![0.0f64; n];
    let mut lower = vec![0.0f64; n];
    // The statistics are kept from pass to pass: each pass returns only the changes made
    // by rows that moved to another cluster (the first pass adds every row).
    let (_, stats) = full_pass(data, init, &mut labels, &mut upper, &mut lower);
    let first = First {
        labels,
        upper,
        lower,
        stats,
    };
    lloyd_core(
        data,
        init,
        fixed,
        stop,
        accelerate,
        mark,
        shift_limit,
        first,
    )
}

#[allow(clippy::too_many_arguments)]
fn lloyd_core(
    data: &Dataset,
    init: &[f32],
    fixed: usize,
    stop: Stop,
    accelerate: bool,
    mark: Option<f64>,
    shift_limit: f64,
    first: First,
) -> Option<LloydResult> {
    let dim = data.dim();
    let n = data.len();
    let k = init.len() / dim;
    let mut means: Vec<f64> = init.iter().map(|&v| v as f64).collect();
    let mut means32: Vec<f32>;
    let First {
        mut labels,
        mut upper,
        mut lower,
        mut stats,
    } = first;

    let mut prev_sse = f64::INFINITY;
    let (mut up, mut down) = (vec![0.0f64; k], vec![0.0f64; k]);
    let mut pass_time = 0.0f64;
    let mut iterations = 0;
    let mut converged = false;
    while iterations < stop.max_iter {
        iterations += 1;
        let sse = stats.sse();
        if let Some(mark) = mark {
            // The passes left: the updates still allowed and the final assignment.
            let left = (stop.max_iter - iterations + 1) as f64;
            let step = prev_sse - sse;
            if step.is_finite() && sse - ABANDON_FACTOR * step.max(0.0) * left > mark {
                return None;
            }
        }
        let old = means.clone();
        let mut empty = Vec::new();
        for j in fixed.min(k)..k {
            let w = stats.weight(j);
            if w > 0.0 {
                let base = j * stats.stride() + 2;
                for d in 0..dim {
                    means[j * dim + d] = stats.v[base + d] / w;
                }
            } else {
                empty.push(j);
            }
        }
        if !empty.is_empty() {
            reseed_empty(data, &mut means, &empty);
        }
        if empty.is_empty() && prev_sse.is_finite() && prev_sse - sse <= stop.tolerance * prev_sse {
            converged = true;
            break;
        }
        prev_sse = sse;
        if empty.is_empty() {
            let moved: f64 = means.iter().zip(&old).map(|(a, b)| (a - b).powi(2)).sum();
            if moved <= shift_limit {
                converged = true;
                break;
            }
        }
        means32 = to_f32(&means);
        let t0 = std::time::Instant::now();
        let (changed, next) = if accelerate && empty.is_empty() && k > 1 {
            let mut moves = Moves::new(&old, &means, &means32, dim);
            moves.accumulate(&mut up, &mut down);
            bounded_pass(data, &means32, &moves, &mut labels, &mut upper, &mut lower)
        } else {
            // A full pass stores plain bounds: the sums start again from zero.
            up.iter_mut().for_each(|v| *v = 0.0);
            down.iter_mut().for_each(|v| *v = 0.0);
            full_pass(data, &means32, &mut labels, &mut upper, &mut lower)
        };
        pass_time += t0.elapsed().as_secs_f64();
        stats.apply(&next);
        if changed == 0 && empty.is_empty() {
            converged = true;
            break;
        }
    }
    means32 = to_f32(&means);
    let (labels, sse) = assign_nearest(data, &means32);
    if crate::trace::enabled() {
        let s: Vec<usize> = SKIPS.iter().map(|c| c.swap(0, Relaxed)).collect();
        let all = s.iter().sum::<usize>().max(1) as f64;
        eprintln!(
            "chromasift: timing: lloyd rows: {n} rows, {iterations} iterations, {pass_time:.3} s in passes; bounded passes \
             settled {:.1}% by bounds, {:.1}% by own distance, {:.1}% by full search",
            100.0 * s[0] as f64 / all,
            100.0 * s[1] as f64 / all,
            100.0 * s[2] as f64 / all
        );
    }
    Some(LloydResult {
        means,
        labels,
        sse,
        iterations,
        converged,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    fn blobs(n_per: usize, centres: &[[f32; 2]], spread: f32, seed: u64) -> Vec<f32> {
        let mut r = Rng::new(seed, 0);
        let mut v = Vec::new();
        for c in centres {
            for _ in 0..n_per {
                v.push(c[0] + spread * (r.uniform() as f32 - 0.5));
                v.push(c[1] + spread * (r.uniform() as f32 - 0.5));
            }
        }
        v
    }

    #[test]
    fn hand_worked_one_dimension() {
        // Rows 0, 2, 10, 12 with means started at 0 and 2: after one update the means
        // are 0+2 → {0}, {2,10,12} = 8, then {0,2} = 1 and {10,12} = 11; SSE = 1+1+1+1 = 4.
        let rows = [0.0f32, 2.0, 10.0, 12.0];
        let data = Dataset::new(&rows, 1, None).unwrap();
        let r = lloyd(&data, &[0.0, 2.0], Stop::exact(100), false);
        assert_eq!(r.means, vec![1.0, 11.0]);
        assert_eq!(r.labels, vec![0, 0, 1, 1]);
        assert_eq!(r.sse, 4.0);
        assert!(r.converged);
    }

    #[test]
    fn a_trial_runs_as_lloyd_unless_it_cannot_reach_its_mark() {
        // A uniform square with six means started in one corner: Lloyd creeps for many
        // passes, each lowering the SSE a little less than the one before.
        let rows = blobs(2000, &[[0.0, 0.0]], 10.0, 7);
        let data = Dataset::new(&rows, 2, None).unwrap();
        let init = [
            -5.0f32, -5.0, -4.9, -5.0, -5.0, -4.9, -4.8, -4.9, -4.9, -4.8, -4.8, -4.8,
        ];
        let stop = Stop::exact(8);
        let plain = lloyd(&data, &init, stop, true);
        assert_eq!(plain.iterations, 8, "the run must still be moving");
        // A mark far below where the run is heading: given up.
        assert!(lloyd_trial(&data, &init, stop, plain.sse * 0.5).is_none());
        // A mark nothing stops at: the same run, bit for bit.
        let same = lloyd_trial(&data, &init, stop, f64::MAX).unwrap();
        assert_eq!(same.means, plain.means);
        assert_eq!(same.labels, plain.labels);
        assert_eq!(same.sse, plain.sse);
        // A mark the run reaches is never given up.
        let reached = lloyd_trial(&data, &init, stop, plain.sse * (1.0 + 1e-9)).unwrap();
        assert_eq!(reached.sse, plain.sse);
    }

    #[test]
    fn weights_equal_repeated_rows() {
        let rows = [0.0f32, 1.0, 5.0, 9.0, 10.0];
        let w = [3.0, 1.0, 2.0, 1.0, 4.0];
        let mut expanded = Vec::new();
        for (x, &c) in rows.iter().zip(&w) {
            for _ in 0..c as usize {
                expanded.push(*x);
            }
        }
        let a = lloyd(
            &Dataset::new(&rows, 1, Some(&w)).unwrap(),
            &[0.0, 10.0],
            Stop::exact(100),
            true,
        );
        let b = lloyd(
            &Dataset::new(&expanded, 1, None).unwrap(),
            &[0.0, 10.0],
            Stop::exact(100),
            true,
        );
        assert_eq!(a.means, b.means);
        assert!((a.sse - b.sse).abs() < 1e-9);
    }

    #[test]
    fn bounds_give_the_same_result_as_plain_lloyd() {
        let centres = [
            [0.0, 0.0],
            [4.0, 1.0],
            [1.0, 5.0],
            [6.0, 6.0],
            [9.0, 2.0],
            [3.0, 3.0],
        ];
        let rows = blobs(400, &centres, 5.0, 3);
        let data = Dataset::new(&rows, 2, None).unwrap();
        for seed in 0..5 {
            let init = crate::cluster::kmeans_plus_plus(&data, 6, &mut Rng::new(seed, 0));
            let a = lloyd(&data, &init, Stop::exact(300), false);
            let b = lloyd(&data, &init, Stop::exact(300), true);
            assert_eq!(a, b, "seed {seed}");
        }
    }

    #[test]
    fn empty_cluster_is_reseeded_from_the_worst_served_row() {
        // Two means start on top of each other far from the data's second group.
        let rows = [0.0f32, 0.1, 0.2, 50.0];
        let data = Dataset::new(&rows, 1, None).unwrap();
        let r = lloyd(&data, &[0.1, 0.1], Stop::exact(100), true);
        let mut m = r.means.clone();
        m.sort_by(f64::total_cmp);
        assert!(
            (m[0] - 0.1).abs() < 1e-6 && (m[1] - 50.0).abs() < 1e-6,
            "{m:?}"
        );
    }

    #[test]
    fn sse_never_rises_between_iterations() {
        let centres = [[0.0, 0.0], [3.0, 0.0], [0.0, 3.0]];
        let rows = blobs(300, &centres, 4.0, 8);
        let data = Dataset::new(&rows, 2, None).unwrap();
        let init = crate::cluster::kmeans_plus_plus(&data, 5, &mut Rng::new(2, 0));
        let mut last = f64::INFINITY;
        for it in 1..15 {
            let r = lloyd(&data, &init, Stop::exact(it), true);
            assert!(r.sse <= last + 1e-9, "iteration {it}: {} > {last}", r.sse);
            last = r.sse;
        }
    }
}
