//! Split-and-merge reallocation of hard k-means means, after Kaukoranta, Fränti &
//! Nevalainen (1998), "Iterative split-and-merge algorithm for vector quantization
//! codebook generation", Optical Engineering 37(10).
//!
//! Lloyd iterations only move each mean within its own neighbourhood, so a solution that
//! spends several means on one dense region and one mean on a wide sparse one stays
//! there. Deterministic annealing ends that way on photographs: its means split in order
//! of temperature, dense regions first (DEVELOPERS.md, "Annealing on photographs"). One
//! move here takes the mean whose cluster costs least to give up (its rows re-served by
//! their second-nearest mean), and the cluster whose split in two lowers the SSE most,
//! puts the freed mean and the split cluster's mean at the two halves of that split, and
//! re-converges by Lloyd. The move is kept only if the SSE fell, so the result is never
//! worse than the Lloyd optimum it started from. No random numbers: same input, same
//! result.

use super::hard::{lloyd, lloyd_trial_from, shift_limit, Stop};
use super::{dist2, nearest_two, Dataset, CHUNK};
use rayon::prelude::*;

/// Candidate clusters tried per move on each side (to split, to give up): up to
/// `TRIES × TRIES` Lloyd runs before a move is abandoned.
const TRIES: usize = 3;

/// Lloyd iterations a trial move gets to beat the SSE it started from. A trial that has
/// not beaten it by then is abandoned; a kept one runs on to the fixed point. Most of the
/// refinement's time went to the failing trials of the last round, each run to its own
/// fixed point: cutting them at 8 made a 2-megapixel photo's refinement about 2.7 times
/// faster at 0.03 % higher SSE on the photos of `tests/engine_quality.rs` and the same
/// Centroid Index 0 on the generated sets (DEVELOPERS.md, "Global refinement").
const TRIAL_ITERATIONS: usize = 8;

/// A cluster's best split: (SSE decrease, first half's mean, second half's mean).
type Split = (f64, Vec<f64>, Vec<f64>);

/// A row's nearest mean and squared distances to its nearest two means.
type Near = (u32, f32, f32);

/// What the reallocation did.
#[derive(Debug, Clone, PartialEq)]
pub struct SplitMerge {
    /// Means after the last kept move and its Lloyd run, `k × dim`.
    pub means: Vec<f32>,
    /// SSE of `means` on the data.
    pub sse: f64,
    /// SSE of the Lloyd optimum the moves started from.
    pub start_sse: f64,
    /// Moves kept.
    pub moves: usize,
}

/// Largest eigenvalue and unit eigenvector of a symmetric positive semi-definite
/// `dim × dim` matrix (power iteration; the start mixes the column with the largest
/// diagonal entry with a vector of unequal, non-zero components, so it is not orthogonal
/// to the principal axis even when that column is another eigenvector).
fn principal(cov: &[f64], dim: usize) -> (f64, Vec<f64>) {
    let col = (0..dim)
        .max_by(|&a, &b| {
            cov[a * dim + a]
                .total_cmp(&cov[b * dim + b])
                .then(b.cmp(&a))
        })
        .unwrap_or(0);
    let scale = cov[col * dim + col].abs().max(f64::MIN_POSITIVE);
    let mut v: Vec<f64> = (0..dim)
        .map(|a| cov[a * dim + col] / scale + 0.5 / (a + 1) as f64)
        .collect();
    let mut lambda = 0.0;
    for _ in 0..200 {
        let norm_v = v.iter().map(|x| x * x).sum::<f64>().sqrt();
        if norm_v == 0.0 || !norm_v.is_finite() {
            return (0.0, vec![0.0; dim]);
        }
        v.iter_mut().for_each(|x| *x /= norm_v);
        let nv: Vec<f64> = (0..dim)
            .map(|a| (0..dim).map(|b| cov[a * dim + b] * v[b]).sum())
            .collect();
        let next = nv.iter().map(|x| x * x).sum::<f64>().sqrt();
        let done = (next - lambda).abs() <= 1e-12 * next;
        lambda = next;
        v = nv;
        if done {
            break;
        }
    }
    let norm_v = v.iter().map(|x| x * x).sum::<f64>().sqrt();
    if norm_v > 0.0 {
        v.iter_mut().for_each(|x| *x /= norm_v);
    }
    (lambda, v)
}

/// The best split of one cluster in two: 2-means over its rows, from its mean ± 0.8 σ
/// along its principal axis (the halves' centroids of a normal distribution sit at
/// ±√(2/π) σ ≈ 0.8 σ). Returns (SSE decrease, first half's mean, second half's mean).
fn split_two(data: &Dataset, members: &[u32]) -> Split {
    let dim = data.dim();
    // The cluster's rows side by side (read many times below) and their weights.
    let mut xs = Vec::with_capacity(members.len() * dim);
    let mut ws = Vec::with_capacity(members.len());
    for &i in members {
        xs.extend(data.row(i as usize).iter().map(|&v| v as f64));
        ws.push(data.weight(i as usize));
    }
    let rows = || xs.chunks_exact(dim.max(1)).zip(&ws);
    let mut mass = 0.0;
    let mut sum = vec![0.0f64; dim];
    for (x, &w) in rows() {
        mass += w;
        for (s, &v) in sum.iter_mut().zip(x) {
            *s += w * v;
        }
    }
    if mass <= 0.0 || members.len() < 2 {
        return (0.0, vec![0.0; dim], vec![0.0; dim]);
    }
    let mu: Vec<f64> = sum.iter().map(|s| s / mass).collect();
    let mut cov = vec![0.0f64; dim * dim];
    for (x, &w) in rows() {
        for a in 0..dim {
            let da = x[a] - mu[a];
            for b in a..dim {
                cov[a * dim + b] += w * da * (x[b] - mu[b]);
            }
        }
    }
    for a in 0..dim {
        for b in a..dim {
            cov[a * dim + b] /= mass;
            cov[b * dim + a] = cov[a * dim + b];
        }
    }
    let whole: f64 = (0..dim).map(|a| cov[a * dim + a]).sum::<f64>() * mass;
    let (lambda, axis) = principal(&cov, dim);
    let step = 0.8 * lambda.max(0.0).sqrt();
    let mut halves = [
        (0..dim)
            .map(|a| mu[a] + step * axis[a])
            .collect::<Vec<f64>>(),
        (0..dim)
            .map(|a| mu[a] - step * axis[a])
            .collect::<Vec<f64>>(),
    ];
    let mut split_sse = whole;
    // Each row's half in the last iteration: once no row changes half, every further
    // iteration would repeat this one exactly (same sums, same halves), so it stops.
    let mut side = vec![u8::MAX; ws.len()];
    for _ in 0..8 {
        let mut acc = [(0.0f64, vec![0.0f64; dim]), (0.0f64, vec![0.0f64; dim])];
        split_sse = 0.0;
        let mut changed = false;
        for ((x, &w), s) in rows().zip(side.iter_mut()) {
            let d = |c: &[f64]| x.iter().zip(c).map(|(&v, &m)| (v - m).powi(2)).sum::<f64>();
            let (d0, d1) = (d(&halves[0]), d(&halves[1]));
            let h = (d1 < d0) as usize;
            changed |= *s != h as u8;
            *s = h as u8;
            split_sse += w * d0.min(d1);
            acc[h].0 += w;
            for (s, &v) in acc[h].1.iter_mut().zip(x) {
                *s += w * v;
            }
        }
        for (half, (m, s)) in halves.iter_mut().zip(&acc) {
            if *m > 0.0 {
                half.iter_mut().zip(s).for_each(|(h, s)| *h = s / m);
            }
        }
        if !changed {
            break;
        }
    }
    let [a, b] = halves;
    ((whole - split_sse).max(0.0), a, b)
}

/// The nearest of a row's old nearest mean `a` (squared distance `d1`, `d2` to the second
/// nearest) and two moved means `p`, `q`, all others unmoved, with the lowest index on
/// ties as a full search gives; and a squared distance no greater than the second
/// nearest's (every unmoved mean but `a` is at least `d2` away).
fn seeded_nearest(
    (a, d1, d2): (usize, f32, f32),
    p: (usize, f32),
    q: (usize, f32),
) -> (usize, f32, f32) {
    let mut best = (a, d1);
    let mut rest = d2;
    for (m, d) in [p, q] {
        if d < best.1 || (d == best.1 && m < best.0) {
            rest = rest.min(best.1);
            best = (m, d);
        } else {
            rest = rest.min(d);
        }
    }
    (best.0, best.1, rest)
}

/// The Lloyd stopping rule of the moves' trials: at most 50 iterations, the caller's
/// relative SSE tolerance, and the centre-shift rule at its default.
pub(crate) fn trial_stop(tolerance: f64) -> Stop {
    Stop {
        max_iter: 50,
        tolerance,
        shift_tolerance: 1e-4,
    }
}

/// Split-and-merge moves from a start (`k × dim`) on a grid summary (`rows`, `weights`,
/// from `grid::coarsen`): what `fit` runs after each k-means++ start when asked to. The
/// caller polishes the result on every row.
pub(crate) fn moves_on_grid(
    rows: &[f32],
    weights: &[f64],
    dim: usize,
    init: &[f32],
    max_moves: usize,
    tolerance: f64,
) -> Vec<f32> {
    match Dataset::new(rows, dim, Some(weights)) {
        Ok(grid) if !grid.is_empty() => {
            split_merge(&grid, init, max_moves, trial_stop(tolerance)).means
        }
        _ => init.to_vec(),
    }
}

/// The start of a search by trial moves (split-and-merge, random swap): Lloyd to a fixed
/// point from `init`, and the margin a trial's SSE must beat.
pub(crate) struct TrialStart {
    pub dim: usize,
    pub k: usize,
    pub means: Vec<f32>,
    pub sse: f64,
    /// A trial is kept only when its SSE is below `margin × sse`.
    pub margin: f64,
}

impl TrialStart {
    pub(crate) fn new(data: &Dataset, init: &[f32], stop: Stop) -> TrialStart {
        let dim = data.dim();
        let first = lloyd(data, init, stop, true);
        TrialStart {
            dim,
            k: init.len() / dim,
            means: first.means.iter().map(|&v| v as f32).collect(),
            sse: first.sse,
            margin: 1.0 - stop.tolerance.clamp(1e-9, 0.5),
        }
    }
}

/// Runs Lloyd from `init` (`k × dim`), then up to `max_moves` split-and-merge moves, each
/// re-converged by Lloyd with `stop`; the SSE never rises. A move is kept only if it lowers
/// the SSE by more than `stop.tolerance` of it (at least 1e-9), so Lloyd merely running on
/// is not counted as a move.
pub fn split_merge(data: &Dataset, init: &[f32], max_moves: usize, stop: Stop) -> SplitMerge {
    let TrialStart {
        dim,
        k,
        mut means,
        mut sse,
        margin,
    } = TrialStart::new(data, init, stop);
    let start_sse = sse;
    let mut moves = 0;
    let limit = shift_limit(data, stop);
    let mut last_round: Vec<(Vec<u32>, Split)> = Vec::new();
    while moves < max_moves && k >= 2 {
        // Each row's nearest mean and distances to its nearest two, and what giving that
        // mean up would cost it.
        let parts: Vec<(Vec<Near>, Vec<f64>)> = data
            .rows()
            .par_chunks(CHUNK * dim)
            .enumerate()
            .map(|(c, rows)| {
                let mut near = Vec::with_capacity(rows.len() / dim);
                let mut cost = vec![0.0f64; k];
                for (o, x) in rows.chunks_exact(dim).enumerate() {
                    let (j, d1, d2) = nearest_two(x, &means, dim);
                    cost[j] += data.weight(c * CHUNK + o) * (d2 - d1) as f64;
                    near.push((j as u32, d1, d2));
                }
                (near, cost)
            })
            .collect();
        let mut removal = vec![0.0f64; k];
        let mut members: Vec<Vec<u32>> = vec![Vec::new(); k];
        let mut near: Vec<Near> = Vec::with_capacity(data.len());
        let mut i = 0u32;
        for (part, cost) in parts {
            removal.iter_mut().zip(&cost).for_each(|(r, c)| *r += c);
            for &(j, _, _) in &part {
                members[j as usize].push(i);
                i += 1;
            }
            near.extend(part);
        }
        // A cluster's split depends only on its rows: one whose rows are those of the
        // last round keeps its split.
        let splits: Vec<Split> = members
            .par_iter()
            .enumerate()
            .map(|(c, m)| match last_round.get(c) {
                Some((rows, split)) if rows == m => split.clone(),
                _ => split_two(data, m),
            })
            .collect();
        let mut give_up: Vec<usize> = (0..k).collect();
        give_up.sort_by(|&a, &b| removal[a].total_cmp(&removal[b]).then(a.cmp(&b)));
        let mut to_split: Vec<usize> = (0..k).filter(|&c| splits[c].0 > 0.0).collect();
        to_split.sort_by(|&a, &b| splits[b].0.total_cmp(&splits[a].0).then(a.cmp(&b)));
        let mut kept = false;
        'tries: for &c in to_split.iter().take(TRIES) {
            for &j in give_up.iter().take(TRIES) {
                if j == c {
                    continue;
                }
                let mut trial = means.clone();
                for (t, &v) in trial[c * dim..(c + 1) * dim].iter_mut().zip(&splits[c].1) {
                    *t = v as f32;
                }
                for (t, &v) in trial[j * dim..(j + 1) * dim].iter_mut().zip(&splits[c].2) {
                    *t = v as f32;
                }
                let cut = Stop {
                    max_iter: stop.max_iter.min(TRIAL_ITERATIONS),
                    ..stop
                };
                // Only means c and j moved: a row's nearest mean is its old one or one
                // of those two, unless its old one was c or j.
                let seeded = |i: usize, x: &[f32]| {
                    let (a, d1, d2) = near[i];
                    let a = a as usize;
                    if a == c || a == j {
                        return nearest_two(x, &trial, dim);
                    }
                    let dc = dist2(x, &trial[c * dim..(c + 1) * dim]);
                    let dj = dist2(x, &trial[j * dim..(j + 1) * dim]);
                    seeded_nearest((a, d1, d2), (c, dc), (j, dj))
                };
                let Some(r) = lloyd_trial_from(data, &trial, cut, sse * margin, limit, seeded)
                else {
                    continue;
                };
                if r.sse < sse * margin {
                    // Kept: run on to the fixed point.
                    let head: Vec<f32> = r.means.iter().map(|&v| v as f32).collect();
                    let r = lloyd(data, &head, stop, true);
                    means = r.means.iter().map(|&v| v as f32).collect();
                    sse = r.sse;
                    kept = true;
                    break 'tries;
                }
            }
        }
        if !kept {
            break;
        }
        last_round = members.into_iter().zip(splits).collect();
        moves += 1;
    }
    SplitMerge {
        means,
        sse,
        start_sse,
        moves,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn stop() -> Stop {
        Stop {
            max_iter: 100,
            tolerance: 0.0,
            shift_tolerance: 0.0,
        }
    }

    #[test]
    fn principal_axis_of_a_diagonal_matrix() {
        let (l, v) = principal(&[1.0, 0.0, 0.0, 0.0, 9.0, 0.0, 0.0, 0.0, 4.0], 3);
        assert!((l - 9.0).abs() < 1e-9);
        assert!((v[1].abs() - 1.0).abs() < 1e-9);
    }

    #[test]
    fn principal_axis_when_the_largest_diagonal_column_is_another_eigenvector() {
        // Eigenvalues 4 (axis x), 6 (axis (0, 1, 1)/√2) and 0; the first column, the
        // one with the largest diagonal entry, is the eigenvector of 4.
        let (l, v) = principal(&[4.0, 0.0, 0.0, 0.0, 3.0, 3.0, 0.0, 3.0, 3.0], 3);
        assert!((l - 6.0).abs() < 1e-6, "{l}");
        assert!(v[0].abs() < 1e-3 && (v[1] - v[2]).abs() < 1e-3, "{v:?}");
    }

    #[test]
    fn moves_a_mean_from_a_tight_pair_to_a_wide_group() {
        // Hand-checkable layout: two tight groups at 0 and 1 (each served by its own mean)
        // and a wide pair of groups at 100 and 120 served by one mean at 110. Giving up
        // one of the tight means costs 100 × 1²·w; splitting the wide cluster saves
        // 2 × 10²·w. Lloyd alone cannot make that move.
        let mut rows = Vec::new();
        for &c in &[0.0f32, 1.0, 100.0, 120.0] {
            rows.extend([c, 0.0]);
        }
        let weights = [100.0, 100.0, 1.0, 1.0];
        let data = Dataset::new(&rows, 2, Some(&weights)).unwrap();
        let init = [0.0f32, 0.0, 1.0, 0.0, 110.0, 0.0];
        let start = lloyd(&data, &init, stop(), true);
        assert!((start.sse - 200.0).abs() < 1e-6, "{}", start.sse);
        let r = split_merge(&data, &init, 4, stop());
        assert_eq!(r.moves, 1);
        assert!((r.start_sse - 200.0).abs() < 1e-6);
        // Tight groups merged at 0.5 (cost 200 × 0.25 = 50), wide ones served exactly.
        assert!((r.sse - 50.0).abs() < 1e-6, "{}", r.sse);
    }

    #[test]
    fn a_trial_seeded_from_the_old_assignment_is_the_plain_trial() {
        // Rows on a coarse lattice (many exact distance ties) and means on the same
        // lattice; moving two means and seeding the first pass from the old nearest means
        // must give the plain trial bit for bit, given up or not.
        let mut rows = Vec::new();
        for a in 0..40 {
            for b in 0..30 {
                rows.extend([(a % 13) as f32, ((a * 7 + b) % 11) as f32]);
            }
        }
        let data = Dataset::new(&rows, 2, None).unwrap();
        let means = [
            0.0f32, 0.0, 4.0, 4.0, 8.0, 2.0, 12.0, 10.0, 2.0, 9.0, 6.0, 6.0,
        ];
        let dim = 2;
        let near: Vec<Near> = rows
            .chunks_exact(dim)
            .map(|x| {
                let (j, d1, d2) = nearest_two(x, &means, dim);
                (j as u32, d1, d2)
            })
            .collect();
        let stop = trial_stop(1e-4);
        let limit = shift_limit(&data, stop);
        for (c, j, to_c, to_j) in [
            (1, 4, [5.0f32, 5.0], [1.0f32, 1.0]),
            (0, 5, [4.0, 4.0], [8.0, 2.0]),
            (3, 2, [0.5, 7.5], [11.0, 3.0]),
        ] {
            let mut trial = means.to_vec();
            trial[c * dim..(c + 1) * dim].copy_from_slice(&to_c);
            trial[j * dim..(j + 1) * dim].copy_from_slice(&to_j);
            let plain = lloyd(&data, &means, stop, true).sse;
            for mark in [f64::MAX, plain, plain * 0.5] {
                let seeded = |i: usize, x: &[f32]| {
                    let (a, d1, d2) = near[i];
                    if a as usize == c || a as usize == j {
                        return nearest_two(x, &trial, dim);
                    }
                    let dc = dist2(x, &trial[c * dim..(c + 1) * dim]);
                    let dj = dist2(x, &trial[j * dim..(j + 1) * dim]);
                    seeded_nearest((a as usize, d1, d2), (c, dc), (j, dj))
                };
                let a = super::super::hard::lloyd_trial(&data, &trial, stop, mark);
                let b = lloyd_trial_from(&data, &trial, stop, mark, limit, seeded);
                assert_eq!(a, b, "move ({c}, {j}), mark {mark}");
            }
        }
    }

    /// The split as first written: rows read through the dataset, always 8 iterations.
    fn split_two_reference(data: &Dataset, members: &[u32]) -> Split {
        let dim = data.dim();
        let (mut mass, mut sum) = (0.0, vec![0.0f64; dim]);
        for &i in members {
            let w = data.weight(i as usize);
            mass += w;
            for (s, &x) in sum.iter_mut().zip(data.row(i as usize)) {
                *s += w * x as f64;
            }
        }
        let mu: Vec<f64> = sum.iter().map(|s| s / mass).collect();
        let mut cov = vec![0.0f64; dim * dim];
        for &i in members {
            let (w, x) = (data.weight(i as usize), data.row(i as usize));
            for a in 0..dim {
                for b in a..dim {
                    cov[a * dim + b] += w * (x[a] as f64 - mu[a]) * (x[b] as f64 - mu[b]);
                }
            }
        }
        for a in 0..dim {
            for b in a..dim {
                cov[a * dim + b] /= mass;
                cov[b * dim + a] = cov[a * dim + b];
            }
        }
        let whole: f64 = (0..dim).map(|a| cov[a * dim + a]).sum::<f64>() * mass;
        let (lambda, axis) = principal(&cov, dim);
        let step = 0.8 * lambda.max(0.0).sqrt();
        let mut halves = [
            (0..dim)
                .map(|a| mu[a] + step * axis[a])
                .collect::<Vec<f64>>(),
            (0..dim)
                .map(|a| mu[a] - step * axis[a])
                .collect::<Vec<f64>>(),
        ];
        let mut split_sse = whole;
        for _ in 0..8 {
            let mut acc = [(0.0f64, vec![0.0f64; dim]), (0.0f64, vec![0.0f64; dim])];
            split_sse = 0.0;
            for &i in members {
                let x = data.row(i as usize);
                let d = |c: &[f64]| {
                    x.iter()
                        .zip(c)
                        .map(|(&v, &m)| (v as f64 - m).powi(2))
                        .sum::<f64>()
                };
                let (d0, d1) = (d(&halves[0]), d(&halves[1]));
                let h = (d1 < d0) as usize;
                let w = data.weight(i as usize);
                split_sse += w * d0.min(d1);
                acc[h].0 += w;
                for (s, &v) in acc[h].1.iter_mut().zip(x) {
                    *s += w * v as f64;
                }
            }
            for (half, (m, s)) in halves.iter_mut().zip(&acc) {
                if *m > 0.0 {
                    half.iter_mut().zip(s).for_each(|(h, s)| *h = s / m);
                }
            }
        }
        let [a, b] = halves;
        ((whole - split_sse).max(0.0), a, b)
    }

    #[test]
    fn a_split_that_stops_when_no_row_changes_half_is_the_eight_iteration_split() {
        let mut r = crate::rng::Rng::new(11, 0);
        let mut rows = Vec::new();
        let mut weights = Vec::new();
        for _ in 0..3000 {
            // Three dimensions, two overlapping groups, uneven weights.
            let g = (r.uniform() < 0.3) as u8 as f32;
            for d in 0..3 {
                rows.push(g * (4.0 + d as f32) + 3.0 * r.uniform() as f32);
            }
            weights.push(1.0 + (r.uniform() * 9.0).floor());
        }
        let data = Dataset::new(&rows, 3, Some(&weights)).unwrap();
        for members in [
            (0..3000).collect::<Vec<u32>>(),
            (0..3000).step_by(7).collect(),
            (100..160).collect(),
            vec![5, 9],
        ] {
            assert_eq!(
                split_two(&data, &members),
                split_two_reference(&data, &members)
            );
        }
    }

    #[test]
    fn seeded_nearest_breaks_ties_by_the_lowest_index() {
        // Old nearest 3 at 4.0 (second at 9.0); mean 1 moved to the same distance wins
        // the tie, and the old one's distance becomes the second's bound.
        assert_eq!(
            seeded_nearest((3, 4.0, 9.0), (1, 4.0), (5, 6.0)),
            (1, 4.0, 4.0)
        );
        // Mean 5 at the same distance does not beat index 3.
        assert_eq!(
            seeded_nearest((3, 4.0, 9.0), (1, 7.0), (5, 4.0)),
            (3, 4.0, 4.0)
        );
        // Both moved means far: the old nearest stays, bound by the old second.
        assert_eq!(
            seeded_nearest((3, 4.0, 9.0), (1, 20.0), (5, 30.0)),
            (3, 4.0, 9.0)
        );
    }

    #[test]
    fn no_move_when_every_group_has_its_own_mean() {
        // Three exact groups, three means already on them: nothing to move.
        let rows = [0.0f32, 0.0, 10.0, 0.0, 0.0, 10.0];
        let data = Dataset::new(&rows, 2, None).unwrap();
        let r = split_merge(&data, &rows, 8, stop());
        assert_eq!(r.moves, 0);
        assert_eq!(r.sse, 0.0);
    }
}
