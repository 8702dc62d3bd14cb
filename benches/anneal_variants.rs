//! Annealing variants against k-means++ starts, in Rust, on the same weighted CIELAB
//! histograms `reduce` clusters. Not a speed test of the tool: a study of whether any
//! form of deterministic annealing reaches a lower SSE than k-means++ restarts given the
//! same clustering time (issue: choosing K and β).
//!
//! ```sh
//! CARGO_TARGET_DIR=/tmp/bench-target cargo bench --bench anneal_variants -- \
//!     /tmp/chromasift-bench/roll200/frame000[0-7].jpg /tmp/chromasift-bench/coffee-4000x3000-noise2.png
//! ```
//!
//! Per image: `CHROMASIFT_STUDY_STARTS` (default 12) k-means++ starts, each polished by
//! Lloyd, as `reduce --restarts` runs them (seed r of the default seed); their mean time is
//! the cost of one start. Then each variant, timed from the histogram to the end of its
//! Lloyd polish:
//!
//! * `anneal/32`, `anneal/16`: the library's annealing (`cluster::anneal`, default
//!   schedule) without its split-and-merge moves, with the finest grid cell at σ/32 (the
//!   default until session 5) and σ/16 (the default since);
//! * `anneal+moves`: the library's annealing as `reduce --anneal` runs it (default
//!   schedule, then up to 32 split-and-merge moves on the finest grid summary);
//! * `anneal/endE+moves` (`CHROMASIFT_STUDY_ENDS=E,...`): the same ending at E β_c;
//! * `k-means+++moves`: start 0's k-means++ means, then the same split-and-merge moves on
//!   the same grid summary (no annealing);
//! * `mass-constrained`: Rose (1998), "Deterministic annealing for clustering,
//!   compression, classification, regression, and related optimization problems",
//!   Proc. IEEE 86(11), sec. III: codevectors with masses p_j, r_ij ∝ p_j exp(−β·½‖x−y_j‖²),
//!   one codevector at the start, a codevector split along its principal axis when β
//!   passes its own critical value 1/λ_max(C_j), at most K; the same schedule and grid
//!   levels as the library;
//! * `seeded/S`: the library's soft stages started at S β_c from the k-means++ means of
//!   start 0 instead of from the centroid.
//!
//! `CHROMASIFT_STUDY_VARIANTS=name,...` runs only the named variants.
//!
//! Printed per variant: the SSE relative to start 0 (a single start), how many of the
//! starts it beats, its time in starts, and whether it beats the best of the R starts
//! that fit in its time (R = its time rounded down, at least 1: the comparison of the issue)
//! and of R rounded up (the restarts then get up to one start's time more).

use chromasift::cluster::{
    anneal, kmeans_plus_plus, lloyd, soft_kmeans, split_merge, Anneal, Dataset, Stop,
};
use chromasift::colour::Space;
use chromasift::histogram;
use chromasift::limits::Limits;
use chromasift::raster::{self, Pixels};
use chromasift::reduce::entry_features;
use chromasift::rng::{Rng, DEFAULT_SEED};
use std::time::Instant;

const K: usize = 16;
const DIM: usize = 3;

fn stop() -> Stop {
    Stop {
        max_iter: 300,
        tolerance: 1e-6,
        shift_tolerance: 1e-4,
    }
}

/// The Lloyd stopping rule the library's annealing gives its split-and-merge moves.
fn split_stop() -> Stop {
    Stop {
        max_iter: 50,
        tolerance: 1e-6,
        shift_tolerance: 1e-4,
    }
}

/// Weighted centroids of the occupied cells of a grid of side `cell`.
fn coarsen(rows: &[f32], w: &[f64], cell: f64) -> (Vec<f32>, Vec<f64>) {
    let mut cells: std::collections::BTreeMap<[i64; DIM], (f64, [f64; DIM])> = Default::default();
    for (x, &wi) in rows.chunks_exact(DIM).zip(w) {
        let key = [0, 1, 2].map(|a| (x[a] as f64 / cell).floor() as i64);
        let e = cells.entry(key).or_insert((0.0, [0.0; DIM]));
        e.0 += wi;
        for (s, &v) in e.1.iter_mut().zip(x) {
            *s += wi * v as f64;
        }
    }
    let mut out = (Vec::new(), Vec::new());
    for (wc, s) in cells.into_values() {
        out.0.extend(s.iter().map(|v| (v / wc) as f32));
        out.1.push(wc);
    }
    out
}

/// One grid summary: (cell side, rows, weights).
type Level = (f64, Vec<f32>, Vec<f64>);

/// Grid summaries as the library builds them: the finest at σ·`finest`, each next one
/// twice as coarse, up to σ or until about 4K cells remain.
fn grid_levels(rows: &[f32], w: &[f64], sigma: f64, finest: f64, k: usize) -> Vec<Level> {
    let c = sigma * finest;
    let (r, ww) = coarsen(rows, w, c);
    let mut levels = vec![(c, r, ww)];
    while levels.last().unwrap().0 < sigma && levels.last().unwrap().2.len() > 4 * k {
        let (c, r, ww) = levels.last().unwrap();
        let (r2, w2) = coarsen(r, ww, c * 2.0);
        levels.push((c * 2.0, r2, w2));
    }
    levels
}

/// The coarsest level whose cells are at most half of 1/√β.
fn level_for(levels: &[Level], beta: f64) -> &Level {
    let want = 0.5 / beta.sqrt();
    levels
        .iter()
        .rev()
        .find(|l| l.0 <= want)
        .unwrap_or(&levels[0])
}

/// Largest eigenvalue and its unit eigenvector of a symmetric DIM × DIM matrix.
fn principal(cov: &[f64; DIM * DIM]) -> (f64, [f64; DIM]) {
    let mut v = [1.0, 0.7, 0.4];
    let mut lambda = 0.0;
    for _ in 0..500 {
        let mut nv = [0.0; DIM];
        for a in 0..DIM {
            for b in 0..DIM {
                nv[a] += cov[a * DIM + b] * v[b];
            }
        }
        let norm = nv.iter().map(|x| x * x).sum::<f64>().sqrt();
        if norm == 0.0 {
            return (0.0, v);
        }
        let done = (norm - lambda).abs() <= 1e-12 * norm;
        v = nv.map(|x| x / norm);
        lambda = norm;
        if done {
            break;
        }
    }
    (lambda, v)
}

/// Weighted first and second moments: (mass, Σw·x, Σw·x xᵀ).
type Moments = (f64, [f64; DIM], [f64; DIM * DIM]);

fn covariance(m: &Moments) -> ([f64; DIM], [f64; DIM * DIM]) {
    let mu = m.1.map(|s| s / m.0);
    let mut cov = [0.0; DIM * DIM];
    for a in 0..DIM {
        for b in 0..DIM {
            cov[a * DIM + b] = m.2[a * DIM + b] / m.0 - mu[a] * mu[b];
        }
    }
    (mu, cov)
}

/// Mass-constrained deterministic annealing (Rose 1998, sec. III), K capped.
fn mass_constrained(rows: &[f32], w: &[f64], k: usize, schedule: &Anneal) -> Vec<f32> {
    let mut all: Moments = (0.0, [0.0; DIM], [0.0; DIM * DIM]);
    for (x, &wi) in rows.chunks_exact(DIM).zip(w) {
        add(&mut all, wi, x);
    }
    let (centre, cov) = covariance(&all);
    let (lambda, _) = principal(&cov);
    let sigma = lambda.sqrt();
    // Grid levels as the library builds them: finest σ·finest_cell, each next twice as coarse.
    let levels = grid_levels(rows, w, sigma, schedule.finest_cell, k);
    let beta_c = 1.0 / lambda;
    let mut y: Vec<[f64; DIM]> = vec![centre];
    let mut p = vec![1.0f64];
    let mut beta = schedule.start * beta_c;
    let end = schedule.end * beta_c;
    loop {
        let (_, lr, lw) = level_for(&levels, beta);
        let total: f64 = lw.iter().sum();
        for _round in 0..=k {
            let mut moments = vec![];
            let mut last_f = f64::INFINITY;
            for _ in 0..schedule.stage_iter {
                let (m, f) = mass_step(lr, lw, total, &y, &p, beta);
                for (j, mj) in m.iter().enumerate() {
                    if mj.0 > 0.0 {
                        p[j] = mj.0;
                        y[j] = mj.1.map(|s| s / mj.0);
                    }
                }
                moments = m;
                let done = (last_f - f).abs() <= 1e-6 * f.abs();
                last_f = f;
                if done {
                    break;
                }
            }
            if y.len() >= k {
                break;
            }
            // Codevectors past their critical β split along their principal axis, the
            // furthest past first, until K.
            let mut critical: Vec<(f64, usize, [f64; DIM])> = moments
                .iter()
                .enumerate()
                .filter(|(_, m)| m.0 > 0.0)
                .filter_map(|(j, m)| {
                    let (l, v) = principal(&covariance(m).1);
                    (beta * l >= 1.0).then(|| (beta * l, j, v.map(|c| c * 0.05 * l.sqrt())))
                })
                .collect();
            if critical.is_empty() {
                break;
            }
            critical.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            for (_, j, d) in critical.into_iter().take(k - y.len()) {
                let c = y[j];
                y[j] = [0, 1, 2].map(|a| c[a] + d[a]);
                y.push([0, 1, 2].map(|a| c[a] - d[a]));
                p[j] *= 0.5;
                p.push(p[j]);
            }
        }
        if beta >= end {
            break;
        }
        beta = (beta * schedule.factor).min(end);
    }
    while y.len() < k {
        y.push(y[0]);
    }
    y.iter().flat_map(|c| c.map(|v| v as f32)).collect()
}

fn add(m: &mut Moments, w: f64, x: &[f32]) {
    m.0 += w;
    for a in 0..DIM {
        m.1[a] += w * x[a] as f64;
        for b in 0..DIM {
            m.2[a * DIM + b] += w * x[a] as f64 * x[b] as f64;
        }
    }
}

/// One soft step with masses: per-codevector moments under r_ij and the free energy.
fn mass_step(
    rows: &[f32],
    w: &[f64],
    total: f64,
    y: &[[f64; DIM]],
    p: &[f64],
    beta: f64,
) -> (Vec<Moments>, f64) {
    let mut m = vec![(0.0, [0.0; DIM], [0.0; DIM * DIM]); y.len()];
    let mut d = vec![0.0; y.len()];
    let mut f = 0.0;
    for (x, &wi) in rows.chunks_exact(DIM).zip(w) {
        let wi = wi / total;
        for (dj, yj) in d.iter_mut().zip(y) {
            *dj = 0.5 * (0..DIM).map(|a| (x[a] as f64 - yj[a]).powi(2)).sum::<f64>();
        }
        let best = d.iter().copied().fold(f64::INFINITY, f64::min);
        let mut z = 0.0;
        for (dj, pj) in d.iter_mut().zip(p) {
            *dj = pj * (-beta * (*dj - best)).exp();
            z += *dj;
        }
        f += wi * (best - z.ln() / beta);
        for (j, dj) in d.iter().enumerate() {
            if *dj > 0.0 {
                add(&mut m[j], wi * dj / z, x);
            }
        }
    }
    (m, f)
}

/// The library's soft stages from given means, starting at `start` β_c.
fn seeded(data: &Dataset, init: &[f32], start: f64, schedule: &Anneal) -> Vec<f32> {
    let w: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    let mut all: Moments = (0.0, [0.0; DIM], [0.0; DIM * DIM]);
    for (x, &wi) in data.rows().chunks_exact(DIM).zip(&w) {
        add(&mut all, wi, x);
    }
    let (lambda, _) = principal(&covariance(&all).1);
    let sigma = lambda.sqrt();
    let levels = grid_levels(data.rows(), &w, sigma, schedule.finest_cell, K);
    let mut means: Vec<f64> = init.iter().map(|&v| v as f64).collect();
    let mut beta = start / lambda;
    let end = schedule.end / lambda;
    loop {
        let (_, lr, lw) = level_for(&levels, beta);
        let sd = Dataset::new(lr, DIM, Some(lw)).expect("grid summary");
        means = soft_kmeans(&sd, &means, beta, schedule.stage_iter, 1e-6).means;
        if beta >= end {
            break;
        }
        beta = (beta * schedule.factor).min(end);
    }
    means.iter().map(|&v| v as f32).collect()
}

/// The finest grid summary the library's annealing runs on (σ/16 cells).
fn finest_grid(data: &Dataset) -> (Vec<f32>, Vec<f64>) {
    let w: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    let mut all: Moments = (0.0, [0.0; DIM], [0.0; DIM * DIM]);
    for (x, &wi) in data.rows().chunks_exact(DIM).zip(&w) {
        add(&mut all, wi, x);
    }
    let (lambda, _) = principal(&covariance(&all).1);
    coarsen(data.rows(), &w, lambda.sqrt() / 16.0)
}

fn main() {
    let images: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    if images.is_empty() {
        eprintln!("usage: cargo bench --bench anneal_variants -- IMAGE...");
        return;
    }
    let starts: u64 = std::env::var("CHROMASIFT_STUDY_STARTS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(12);
    let only: Vec<String> = std::env::var("CHROMASIFT_STUDY_VARIANTS")
        .map(|v| v.split(',').map(str::to_string).collect())
        .unwrap_or_default();
    let ends: Vec<f64> = std::env::var("CHROMASIFT_STUDY_ENDS")
        .ok()
        .map(|v| v.split(',').filter_map(|e| e.parse().ok()).collect())
        .unwrap_or_default();
    let mut wins = std::collections::BTreeMap::<String, (usize, usize, usize)>::new();
    for path in &images {
        let img = raster::decode(std::path::Path::new(path), &Limits::default()).expect("decode");
        let indexed = match &img.pixels {
            Pixels::Rgba8(p) => histogram::from_rgba8(p),
            Pixels::Rgba16(p) => histogram::from_rgba16(p),
        };
        let weights = indexed.histogram.weights();
        let (rows, _) = entry_features(&indexed.histogram, Space::Cielab);
        let data = Dataset::new(&rows, DIM, Some(&weights)).expect("dataset");
        let t0 = Instant::now();
        let sses: Vec<f64> = (0..starts)
            .map(|r| {
                let init = kmeans_plus_plus(&data, K, &mut Rng::new(DEFAULT_SEED, r));
                lloyd(&data, &init, stop(), true).sse
            })
            .collect();
        let per_start = t0.elapsed().as_secs_f64() / starts as f64;
        let best = sses.iter().copied().fold(f64::INFINITY, f64::min);
        println!(
            "{path}: {} colours; one k-means++ start {:.3} s; best of {starts} = {:.4} of start 0",
            data.len(),
            per_start,
            best / sses[0]
        );
        type Run<'a> = Box<dyn Fn() -> Vec<f32> + 'a>;
        type Variant<'a> = (String, Run<'a>);
        let fixed: Vec<(&str, Run)> = vec![
            (
                "anneal/32",
                Box::new(|| {
                    let s = Anneal {
                        finest_cell: 1.0 / 32.0,
                        split_merge: 0,
                        ..Anneal::default()
                    };
                    anneal(&data, K, &s, DEFAULT_SEED, 1e-6)
                        .means
                        .iter()
                        .map(|&v| v as f32)
                        .collect()
                }),
            ),
            (
                "anneal/16",
                Box::new(|| {
                    let s = Anneal {
                        split_merge: 0,
                        ..Anneal::default()
                    };
                    anneal(&data, K, &s, DEFAULT_SEED, 1e-6)
                        .means
                        .iter()
                        .map(|&v| v as f32)
                        .collect()
                }),
            ),
            (
                "mass-constrained",
                Box::new(|| mass_constrained(&rows, &weights, K, &Anneal::default())),
            ),
            (
                "seeded/8",
                Box::new(|| {
                    let init = kmeans_plus_plus(&data, K, &mut Rng::new(DEFAULT_SEED, 0));
                    seeded(&data, &init, 8.0, &Anneal::default())
                }),
            ),
            (
                "seeded/64",
                Box::new(|| {
                    let init = kmeans_plus_plus(&data, K, &mut Rng::new(DEFAULT_SEED, 0));
                    seeded(&data, &init, 64.0, &Anneal::default())
                }),
            ),
            (
                "anneal+moves",
                Box::new(|| {
                    anneal(&data, K, &Anneal::default(), DEFAULT_SEED, 1e-6)
                        .means
                        .iter()
                        .map(|&v| v as f32)
                        .collect()
                }),
            ),
            (
                "k-means+++moves",
                Box::new(|| {
                    let init = kmeans_plus_plus(&data, K, &mut Rng::new(DEFAULT_SEED, 0));
                    let (gr, gw) = finest_grid(&data);
                    let g = Dataset::new(&gr, DIM, Some(&gw)).expect("grid");
                    let moves = Anneal::default().split_merge;
                    split_merge(&g, &init, moves, split_stop()).means
                }),
            ),
        ];
        let mut variants: Vec<Variant> =
            fixed.into_iter().map(|(n, f)| (n.to_string(), f)).collect();
        // The library's annealing with its moves, ending at other β (multiples of β_c).
        for end in &ends {
            let data = &data;
            variants.push((
                format!("anneal/end{end}+moves"),
                Box::new(move || {
                    let s = Anneal {
                        end: *end,
                        ..Anneal::default()
                    };
                    anneal(data, K, &s, DEFAULT_SEED, 1e-6)
                        .means
                        .iter()
                        .map(|&v| v as f32)
                        .collect()
                }),
            ));
        }
        for (name, run) in variants.iter() {
            if !only.is_empty() && !only.iter().any(|o| o == name) {
                continue;
            }
            let t = Instant::now();
            let init = run();
            let sse = lloyd(&data, &init, stop(), true).sse;
            let cost = t.elapsed().as_secs_f64() / per_start;
            // R rounded down (the variant may have up to one start's time more than the
            // restarts) and up (the restarts may have up to one start's time more).
            let r = (cost.floor() as usize).clamp(1, starts as usize);
            let r_up = (cost.ceil() as usize).clamp(1, starts as usize);
            let best_of = |n: usize| sses[..n].iter().copied().fold(f64::INFINITY, f64::min);
            let beaten = sses.iter().filter(|&&s| sse < s).count();
            let (win, win_up) = (sse < best_of(r), sse < best_of(r_up));
            let e = wins.entry(name.to_string()).or_default();
            e.0 += win as usize;
            e.1 += win_up as usize;
            e.2 += (sse < sses[0]) as usize;
            println!(
                "  {name:17} SSE {:.4} of start 0, beats {beaten:2}/{starts} starts, time {cost:5.2} starts; \
                 best of R = {r:2}: {}; of R + 1: {}",
                sse / sses[0],
                if win { "annealing lower" } else { "restarts lower or equal" },
                if win_up { "annealing lower" } else { "restarts lower or equal" }
            );
        }
    }
    for (name, (w, w_up, s)) in wins {
        println!(
            "{name:17} lower than equal-time restarts on {w}/{n} (R rounded up: {w_up}/{n}), \
             than one start on {s}/{n}",
            n = images.len()
        );
    }
}
