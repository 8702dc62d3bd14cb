//! Global refinement of a k-means++ start: moves that take a mean from where it is
//! redundant to where the data lacks one, which Lloyd iterations cannot do (they only move
//! each mean within its own neighbourhood, so they stop in the first local minimum).
//!
//! Three kinds of move are offered ([`Refine`]); each keeps a move only if the SSE falls,
//! so the result is never worse than the Lloyd optimum it started from (on the rows the
//! moves run on):
//!
//! * **Split-and-merge** moves ([`super::split_merge`], the default): give up the mean
//!   whose cluster costs least to re-serve, split the cluster whose split lowers the SSE
//!   most, re-converge by Lloyd.
//! * **Swap**: draw a row with probability ∝ w·D² (D its distance to its
//!   nearest mean, as k-means++ draws), find the mean whose replacement by that row lowers
//!   the SSE most (every mean scored exactly in one pass over the rows, from each row's
//!   nearest and second-nearest distance), and if the swap lowers the SSE, make it and
//!   re-converge by Lloyd. This is the local search of Lattanzi & Sohler (2019), "A better
//!   k-means++ algorithm via local search", ICML, with a Lloyd run after each kept swap.
//! * **Random swap** (Fränti 2018, "Efficiency of random swap clustering", J. Big Data
//!   5:13): replace a mean drawn uniformly by a row drawn ∝ its weight, run two Lloyd
//!   iterations, keep the result if the SSE fell.
//!
//! The moves run on a grid summary of the rows when it is much smaller (`fit` builds it);
//! `fit` then polishes the result by Lloyd on every row. Random draws come from their own
//! generator stream, so the result depends only on the data, the seed and the settings.

use super::hard::{lloyd, Stop};
use super::init::draw;
use super::split_merge::{split_merge, trial_stop};
use super::{dist2, nearest_two_by_dim, Dataset, MeansByDim, CHUNK};
use crate::error::ParamsError;
use crate::rng::Rng;
use rayon::prelude::*;

/// Most swap trials per mean, random-swap trials per mean, or split-and-merge moves.
pub const MAX_REFINE: usize = 10_000;

/// The global refinement after each k-means++ start.
///
/// Not used with pinned means (the moves would move them) nor after annealing (which has
/// its own split-and-merge moves, `Anneal::split_merge`), nor when fitting from given means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Refine {
    /// None: k-means++ then Lloyd, the textbook algorithm.
    None,
    /// Swap moves: this many trials per mean (a row drawn ∝ w·D², swapped with the mean
    /// whose replacement lowers the SSE most, kept if the SSE falls).
    Swap(usize),
    /// Random swap (Fränti 2018): this many trials per mean (a mean drawn uniformly
    /// replaced by a row drawn ∝ weight, two Lloyd iterations, kept if the SSE falls).
    RandomSwap(usize),
    /// Split-and-merge: at most this many moves.
    SplitMerge(usize),
}

/// Swap trials per mean when `swap` is given without a count.
pub const DEFAULT_SWAP_TRIALS: usize = 4;
/// Random-swap trials per mean when `random-swap` is given without a count.
pub const DEFAULT_RANDOM_SWAP_TRIALS: usize = 50;
/// Most split-and-merge moves of the default refinement (and of `split-merge` without a
/// count). The moves stop earlier when none lowers the SSE; on the measured sets and
/// photos they stopped before 8 (DEVELOPERS.md, "Global refinement").
pub const DEFAULT_SPLIT_MERGE_MOVES: usize = 32;

impl Default for Refine {
    /// Split-and-merge, at most [`DEFAULT_SPLIT_MERGE_MOVES`] moves: chosen by measurement
    /// against swap and random swap (DEVELOPERS.md, "Global refinement").
    fn default() -> Self {
        Refine::SplitMerge(DEFAULT_SPLIT_MERGE_MOVES)
    }
}

impl Refine {
    /// Checks the bound of the count.
    pub fn check(&self) -> Result<(), ParamsError> {
        let (what, n) = match *self {
            Refine::None => return Ok(()),
            Refine::Swap(n) => ("swap trials per mean", n),
            Refine::RandomSwap(n) => ("random-swap trials per mean", n),
            Refine::SplitMerge(n) => ("split-and-merge moves", n),
        };
        if n == 0 || n > MAX_REFINE {
            return Err(ParamsError::Other(format!(
                "refinement: {what} must be between 1 and {MAX_REFINE} (got {n}); use 'none' for no refinement"
            )));
        }
        Ok(())
    }

    /// Whether any move runs.
    pub fn is_none(&self) -> bool {
        *self == Refine::None
    }
}

impl std::fmt::Display for Refine {
    /// The form [`std::str::FromStr`] reads: `none`, `swap:N`, `random-swap:N`, `split-merge:N`.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match *self {
            Refine::None => write!(f, "none"),
            Refine::Swap(n) => write!(f, "swap:{n}"),
            Refine::RandomSwap(n) => write!(f, "random-swap:{n}"),
            Refine::SplitMerge(n) => write!(f, "split-merge:{n}"),
        }
    }
}

/// Written as its text form (`"split-merge:32"`, `"none"`, …).
impl serde::Serialize for Refine {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

impl<'de> serde::Deserialize<'de> for Refine {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let text = String::deserialize(d)?;
        text.parse().map_err(serde::de::Error::custom)
    }
}

impl std::str::FromStr for Refine {
    type Err = String;
    /// `none`, `swap`, `random-swap`, `split-merge`, each but `none` optionally with
    /// `:N` (the count; defaults: swap 4 trials per mean, random swap 50 trials per mean,
    /// split-and-merge 32 moves). The bound is checked by [`Refine::check`].
    fn from_str(s: &str) -> Result<Self, String> {
        let t = s.trim().to_ascii_lowercase();
        let (name, count) = match t.split_once(':') {
            Some((a, b)) => {
                let n = b.trim().parse::<usize>().map_err(|_| {
                    format!(
                        "refinement count must be a whole number (got '{}')",
                        b.trim()
                    )
                })?;
                (a.trim().to_string(), Some(n))
            }
            None => (t.clone(), None),
        };
        match (name.as_str(), count) {
            ("none", None) => Ok(Refine::None),
            ("none", Some(_)) => Err("refinement 'none' takes no count".into()),
            ("swap", n) => Ok(Refine::Swap(n.unwrap_or(DEFAULT_SWAP_TRIALS))),
            ("random-swap", n) => Ok(Refine::RandomSwap(n.unwrap_or(DEFAULT_RANDOM_SWAP_TRIALS))),
            ("split-merge", n) => Ok(Refine::SplitMerge(n.unwrap_or(DEFAULT_SPLIT_MERGE_MOVES))),
            _ => Err(format!(
                "unknown refinement '{s}' (use none, swap, random-swap or split-merge, \
                 optionally with :N)"
            )),
        }
    }
}

/// What a refinement did.
#[derive(Debug, Clone, PartialEq)]
pub struct Refined {
    /// Means after the last kept move and its Lloyd run, `k × dim`.
    pub means: Vec<f32>,
    /// SSE of `means` on the rows the moves ran on.
    pub sse: f64,
    /// SSE of the Lloyd optimum the moves started from.
    pub start_sse: f64,
    /// Moves kept.
    pub moves: usize,
    /// Trials made.
    pub trials: usize,
}

impl Refined {
    fn new(means: Vec<f32>, sse: f64, start_sse: f64, moves: usize, trials: usize) -> Refined {
        Refined {
            means,
            sse,
            start_sse,
            moves,
            trials,
        }
    }
}

/// Runs Lloyd from `init` (`k × dim`) on `data`, then the moves of `refine`; random draws
/// from `rng`. Lloyd runs stop by [`trial_stop`] with `tolerance`.
pub fn refine_means(
    data: &Dataset,
    init: &[f32],
    refine: Refine,
    tolerance: f64,
    rng: &mut Rng,
) -> Refined {
    let stop = trial_stop(tolerance);
    let k = init.len() / data.dim().max(1);
    match refine {
        Refine::None => {
            let r = lloyd(data, init, stop, true);
            Refined {
                means: r.means.iter().map(|&v| v as f32).collect(),
                sse: r.sse,
                start_sse: r.sse,
                moves: 0,
                trials: 0,
            }
        }
        Refine::SplitMerge(n) => {
            let r = split_merge(data, init, n, stop);
            Refined {
                means: r.means,
                sse: r.sse,
                start_sse: r.start_sse,
                moves: r.moves,
                trials: r.moves,
            }
        }
        Refine::Swap(per_mean) => swap(data, init, per_mean.saturating_mul(k), stop, rng),
        Refine::RandomSwap(per_mean) => {
            random_swap(data, init, per_mean.saturating_mul(k), stop, rng)
        }
    }
}

/// Each row's nearest mean and its squared distances to the nearest and second-nearest
/// mean, and the per-chunk sums of w·d1 (the SSE, summed in chunk order by the caller).
struct Nearest {
    labels: Vec<u32>,
    d1: Vec<f32>,
    d2: Vec<f32>,
    chunk_sse: Vec<f64>,
    /// Weight of each mean's cluster.
    mass: Vec<f64>,
}

impl Nearest {
    fn of(data: &Dataset, means: &[f32]) -> Nearest {
        let n = data.len();
        let k = means.len() / data.dim();
        let by_dim = MeansByDim::new(means, data.dim());
        let mut labels = vec![0u32; n];
        let mut d1 = vec![0.0f32; n];
        let mut d2 = vec![0.0f32; n];
        let parts: Vec<(f64, Vec<f64>)> = labels
            .par_chunks_mut(CHUNK)
            .zip(d1.par_chunks_mut(CHUNK))
            .zip(d2.par_chunks_mut(CHUNK))
            .enumerate()
            .map(|(c, ((ls, a), b))| {
                let mut s = 0.0f64;
                let mut mass = vec![0.0f64; k];
                for o in 0..ls.len() {
                    let i = c * CHUNK + o;
                    let (j, x1, x2) = nearest_two_by_dim(data.row(i), &by_dim);
                    ls[o] = j as u32;
                    a[o] = x1;
                    b[o] = x2;
                    let w = data.weight(i);
                    s += w * x1 as f64;
                    mass[j] += w;
                }
                (s, mass)
            })
            .collect();
        let mut mass = vec![0.0f64; k];
        let mut chunk_sse = Vec::with_capacity(parts.len());
        for (s, m) in parts {
            chunk_sse.push(s);
            mass.iter_mut().zip(m).for_each(|(a, b)| *a += b);
        }
        Nearest {
            labels,
            d1,
            d2,
            chunk_sse,
            mass,
        }
    }

    fn sse(&self) -> f64 {
        self.chunk_sse.iter().sum()
    }
}

/// SSE after adding a mean at `p` (`base`) and, per mean `j`, what removing `j` then adds
/// back (`loss[j]`): the SSE of swapping `j` for `p` is `base + loss[j]`, exactly, before
/// any Lloyd iteration. One pass over the rows; partial sums reduced in chunk order.
fn swap_costs(data: &Dataset, near: &Nearest, p: &[f32], k: usize) -> (f64, Vec<f64>) {
    let dim = data.dim();
    let rows = data.rows();
    let parts: Vec<(f64, Vec<f64>)> = rows
        .par_chunks(CHUNK * dim)
        .enumerate()
        .map(|(c, chunk)| {
            let mut base = 0.0f64;
            let mut loss = vec![0.0f64; k];
            for (o, x) in chunk.chunks_exact(dim).enumerate() {
                let i = c * CHUNK + o;
                let w = data.weight(i);
                if w == 0.0 {
                    continue;
                }
                let dc = dist2(x, p);
                let (a, b) = (near.d1[i], near.d2[i]);
                let with = dc.min(a);
                base += w * with as f64;
                // Removing the row's own mean leaves it the better of p and its second.
                loss[near.labels[i] as usize] += w * (dc.min(b) - with) as f64;
            }
            (base, loss)
        })
        .collect();
    let mut base = 0.0f64;
    let mut loss = vec![0.0f64; k];
    for (b, l) in parts {
        base += b;
        loss.iter_mut().zip(l).for_each(|(a, v)| *a += v);
    }
    (base, loss)
}

/// The mean whose cluster merged with its nearest other mean's costs least, and that cost
/// w_a·w_b/(w_a + w_b)·‖m_a − m_b‖² (Ward 1963; exact for means at their clusters'
/// centroids). Lowest index on ties.
fn cheapest_merge(means: &[f32], mass: &[f64], dim: usize) -> (usize, f64) {
    let k = mass.len();
    let costs: Vec<f64> = (0..k)
        .into_par_iter()
        .with_min_len(64)
        .map(|a| {
            let ma = &means[a * dim..(a + 1) * dim];
            let mut best = f64::INFINITY;
            for b in 0..k {
                if b == a {
                    continue;
                }
                let (wa, wb) = (mass[a], mass[b]);
                let d = dist2(ma, &means[b * dim..(b + 1) * dim]) as f64;
                let c = if wa + wb > 0.0 {
                    wa * wb / (wa + wb) * d
                } else {
                    0.0
                };
                best = best.min(c);
            }
            best
        })
        .collect();
    let mut j = 0;
    for t in 1..k {
        if costs[t] < costs[j] {
            j = t;
        }
    }
    (j, costs[j])
}

/// Swap moves (see the module documentation): `trials` draws in all.
fn swap(data: &Dataset, init: &[f32], trials: usize, stop: Stop, rng: &mut Rng) -> Refined {
    let dim = data.dim();
    let k = init.len() / dim;
    let first = lloyd(data, init, stop, true);
    let mut means: Vec<f32> = first.means.iter().map(|&v| v as f32).collect();
    let mut near = Nearest::of(data, &means);
    let mut sse = near.sse();
    let start_sse = sse;
    let margin = 1.0 - stop.tolerance.clamp(1e-9, 0.5);
    let mut moves = 0;
    let mut made = 0;
    if k < 2 {
        return Refined {
            means,
            sse,
            start_sse,
            moves,
            trials: made,
        };
    }
    while made < trials {
        if sse <= 0.0 {
            break; // every row on a mean
        }
        made += 1;
        let i = draw(data, Some(&near.d1), &near.chunk_sse, rng);
        let p = data.row(i).to_vec();
        let (base, loss) = swap_costs(data, &near, &p, k);
        let mut j = 0;
        for t in 1..k {
            if loss[t] < loss[j] {
                j = t;
            }
        }
        // The swap as scored, if it lowers the SSE; else the mean whose merge with its
        // nearest other mean costs least (Ward's cost: the two clusters' rows served by
        // their joint mean), which is what giving up one of two means sharing a group
        // costs once Lloyd has moved the other, when that merge and the new mean's gain
        // together promise a lower SSE.
        let pick = if base + loss[j] < sse * margin {
            Some(j)
        } else {
            let (m, cost) = cheapest_merge(&means, &near.mass, dim);
            (base + cost < sse * margin).then_some(m)
        };
        let Some(j) = pick else { continue };
        let mut trial = means.clone();
        trial[j * dim..(j + 1) * dim].copy_from_slice(&p);
        let r = lloyd(data, &trial, stop, true);
        if r.sse < sse * margin {
            means = r.means.iter().map(|&v| v as f32).collect();
            near = Nearest::of(data, &means);
            sse = near.sse();
            moves += 1;
        }
    }
    Refined::new(means, sse, start_sse, moves, made)
}

/// Random swap (Fränti 2018): `trials` draws in all.
fn random_swap(data: &Dataset, init: &[f32], trials: usize, stop: Stop, rng: &mut Rng) -> Refined {
    let super::split_merge::TrialStart {
        dim,
        k,
        mut means,
        mut sse,
        margin,
    } = super::split_merge::TrialStart::new(data, init, stop);
    let start_sse = sse;
    let weight_sums: Vec<f64> = (0..data.len().div_ceil(CHUNK))
        .map(|c| {
            (c * CHUNK..((c + 1) * CHUNK).min(data.len()))
                .map(|i| data.weight(i))
                .sum()
        })
        .collect();
    let two = Stop {
        max_iter: 2,
        tolerance: 0.0,
        shift_tolerance: 0.0,
    };
    let mut moves = 0;
    let mut made = 0;
    while made < trials && k >= 2 && sse > 0.0 {
        made += 1;
        let j = rng.below(k);
        let i = draw(data, None, &weight_sums, rng);
        let mut trial = means.clone();
        trial[j * dim..(j + 1) * dim].copy_from_slice(data.row(i));
        let r = lloyd(data, &trial, two, true);
        if r.sse < sse * margin {
            means = r.means.iter().map(|&v| v as f32).collect();
            sse = r.sse;
            moves += 1;
        }
    }
    // Lloyd to convergence from the last kept solution.
    let r = lloyd(data, &means, stop, true);
    if r.sse <= sse {
        means = r.means.iter().map(|&v| v as f32).collect();
        sse = r.sse;
    }
    Refined::new(means, sse, start_sse, moves, made)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_prints_every_form() {
        for (s, want) in [
            ("none", Refine::None),
            ("swap", Refine::Swap(DEFAULT_SWAP_TRIALS)),
            ("swap:12", Refine::Swap(12)),
            ("Random-Swap:7", Refine::RandomSwap(7)),
            ("split-merge", Refine::SplitMerge(32)),
            ("split-merge:3", Refine::SplitMerge(3)),
        ] {
            let r: Refine = s.parse().unwrap();
            assert_eq!(r, want, "{s}");
            assert_eq!(r.to_string().parse::<Refine>().unwrap(), r);
        }
        for bad in ["", "swapp", "none:3", "swap:x", "swap:-1"] {
            assert!(bad.parse::<Refine>().is_err(), "{bad}");
        }
        assert!(Refine::Swap(0).check().is_err());
        assert!(Refine::SplitMerge(MAX_REFINE + 1).check().is_err());
        assert!(Refine::RandomSwap(MAX_REFINE).check().is_ok());
        assert!(Refine::None.check().is_ok());
    }

    #[test]
    fn swap_costs_equal_the_sse_after_each_swap() {
        // Every predicted swap SSE (before Lloyd) against the SSE of the swapped means
        // computed directly.
        let mut r = Rng::new(3, 0);
        let rows: Vec<f32> = (0..600).map(|_| (r.uniform() * 50.0) as f32).collect();
        let weights: Vec<f64> = (0..300).map(|_| 1.0 + r.below(3) as f64).collect();
        let data = Dataset::new(&rows, 2, Some(&weights)).unwrap();
        let means: Vec<f32> = rows[..10].to_vec();
        let near = Nearest::of(&data, &means);
        let p = [25.0f32, 12.5];
        let (base, loss) = swap_costs(&data, &near, &p, 5);
        for j in 0..5 {
            let mut m = means.clone();
            m[j * 2..j * 2 + 2].copy_from_slice(&p);
            let direct = super::super::assign_nearest(&data, &m).1;
            assert!(
                (base + loss[j] - direct).abs() <= 1e-6 * direct,
                "mean {j}: {} vs {direct}",
                base + loss[j]
            );
        }
    }

    #[test]
    fn swap_moves_a_mean_from_a_shared_group_to_a_lonely_one() {
        // Four groups on a line, two means started in the first group and none in the
        // last: Lloyd alone keeps the pair; one swap fixes it (SSE of the exact groups: 0).
        let mut rows = Vec::new();
        for &c in &[0.0f32, 10.0, 20.0, 60.0] {
            for d in [-0.5f32, 0.5] {
                rows.extend([c + d, 0.0]);
            }
        }
        let data = Dataset::new(&rows, 2, None).unwrap();
        let init = [-0.5f32, 0.0, 0.5, 0.0, 10.0, 0.0, 20.0, 0.0];
        let plain = refine_means(&data, &init, Refine::None, 0.0, &mut Rng::new(1, 0));
        assert!(plain.sse > 100.0, "{}", plain.sse);
        let r = refine_means(&data, &init, Refine::Swap(4), 0.0, &mut Rng::new(1, 0));
        assert!(r.moves >= 1);
        assert!((r.sse - 2.0).abs() < 1e-6, "{}", r.sse);
    }
}
