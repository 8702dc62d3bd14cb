//! The clustering engine against outside references and against its own variants.

mod common;

use chromasift::cluster::{
    fit, fit_from, kmeans_plus_plus, lloyd, responsibility_matrix, split_merge, Anneal, Beta,
    Dataset, KMeansParams, Mode, Stop,
};
use chromasift::colour::Space;
use chromasift::histogram;
use chromasift::reduce::entry_features;
use chromasift::rng::Rng;

fn iris() -> (Vec<f32>, serde_json::Value) {
    let text = std::fs::read_to_string(common::fixture("reference/iris_kmeans.json")).unwrap();
    let doc: serde_json::Value = serde_json::from_str(&text).unwrap();
    let rows: Vec<f32> = doc["data"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap() as f32)
                .collect::<Vec<_>>()
        })
        .collect();
    (rows, doc)
}

/// Iris (Fisher 1936, as shipped by scikit-learn) with k = 3: our SSE equals the inertia
/// of scikit-learn 1.9.1 KMeans (k-means++, n_init = 10, lloyd), and so do the centres.
/// Reference: fixtures/reference/iris_kmeans.json from tests/reference/make_fixtures.py.
#[test]
fn iris_k3_matches_scikit_learn() {
    let (rows, doc) = iris();
    let data = Dataset::new(&rows, 4, None).unwrap();
    let want = doc["kmeans"]["inertia"].as_f64().unwrap();
    let params = KMeansParams::new(3)
        .restarts(10)
        .tolerance(0.0)
        .check()
        .unwrap();
    let model = fit(&data, &params).unwrap();
    assert!(
        (model.sse - want).abs() / want < 1e-5,
        "SSE {} vs scikit-learn {want}",
        model.sse
    );
    let mut centres: Vec<Vec<f64>> = model.means.chunks(4).map(|c| c.to_vec()).collect();
    centres.sort_by(|a, b| a[0].total_cmp(&b[0]));
    let want_c = doc["kmeans"]["centers"].as_array().unwrap();
    for (c, w) in centres.iter().zip(want_c) {
        for (a, b) in c.iter().zip(w.as_array().unwrap()) {
            assert!((a - b.as_f64().unwrap()).abs() < 1e-4, "{c:?} vs {w}");
        }
    }
    // Single starts never land in a worse optimum than scikit-learn's worst of 50 seeds.
    let worst = doc["worst_inertia_50_seeds"].as_f64().unwrap();
    for seed in 0..20 {
        let m = fit(
            &data,
            &KMeansParams::new(3)
                .seed(seed)
                .tolerance(0.0)
                .check()
                .unwrap(),
        )
        .unwrap();
        assert!(
            m.sse <= worst * (1.0 + 1e-5),
            "seed {seed}: {} > {worst}",
            m.sse
        );
    }
}

/// Samples of an equal-weight isotropic Gaussian mixture (standard deviation `sigma`),
/// drawn with Box–Muller from our seeded generator.
fn mixture(means: &[[f64; 2]], sigma: f64, n_per: usize, seed: u64) -> Vec<f32> {
    let mut r = Rng::new(seed, 0);
    let mut out = Vec::new();
    for m in means {
        for _ in 0..n_per {
            let u1 = r.uniform().max(1e-300);
            let u2 = r.uniform();
            let rad = (-2.0 * u1.ln()).sqrt();
            let th = std::f64::consts::TAU * u2;
            out.push((m[0] + sigma * rad * th.cos()) as f32);
            out.push((m[1] + sigma * rad * th.sin()) as f32);
        }
    }
    out
}

/// Closed-form posterior of an equal-weight isotropic Gaussian mixture (Bishop 2006,
/// PRML §9.3.2): γ_k(x) = exp(−‖x − μ_k‖²/2σ²) / Σ_j exp(−‖x − μ_j‖²/2σ²).
fn posterior(x: [f64; 2], means: &[[f64; 2]], sigma: f64) -> Vec<f64> {
    let e: Vec<f64> = means
        .iter()
        .map(|m| (-((x[0] - m[0]).powi(2) + (x[1] - m[1]).powi(2)) / (2.0 * sigma * sigma)).exp())
        .collect();
    let s: f64 = e.iter().sum();
    e.iter().map(|v| v / s).collect()
}

#[test]
fn soft_responsibilities_at_beta_one_over_sigma2_are_the_gaussian_posterior() {
    let true_means = [[0.0, 0.0], [3.0, 0.0], [1.5, 2.6]];
    let sigma = 1.0;
    let rows = mixture(&true_means, sigma, 4000, 11);
    let data = Dataset::new(&rows, 2, None).unwrap();
    let flat: Vec<f64> = true_means.iter().flatten().copied().collect();

    // Exact up to single-precision exponentials: with the true means, r at β = 1/σ² is the
    // closed form.
    let r = responsibility_matrix(&data, &flat, 1.0 / (sigma * sigma));
    for i in (0..data.len()).step_by(37) {
        let x = data.row(i);
        let p = posterior([x[0] as f64, x[1] as f64], &true_means, sigma);
        for k in 0..3 {
            assert!((r[i * 3 + k] - p[k]).abs() < 1e-6);
        }
    }

    // Fitted: soft k-means at β = 1/σ² recovers means and posteriors from the data alone.
    let params = KMeansParams::new(3)
        .mode(Mode::Soft)
        .beta(Beta::Fixed(1.0))
        .check()
        .unwrap();
    let model = fit(&data, &params).unwrap();
    let mut err = 0.0;
    let rf = responsibility_matrix(&data, &model.means, 1.0);
    // Match fitted clusters to true components by nearest mean.
    let map: Vec<usize> = (0..3)
        .map(|k| {
            (0..3)
                .min_by(|&a, &b| {
                    let d = |j: usize| {
                        (model.means[j * 2] - true_means[k][0]).powi(2)
                            + (model.means[j * 2 + 1] - true_means[k][1]).powi(2)
                    };
                    d(a).total_cmp(&d(b))
                })
                .unwrap()
        })
        .collect();
    for i in 0..data.len() {
        let x = data.row(i);
        let p = posterior([x[0] as f64, x[1] as f64], &true_means, sigma);
        for k in 0..3 {
            err += (rf[i * 3 + map[k]] - p[k]).abs();
        }
    }
    let mean_err = err / (3 * data.len()) as f64;
    assert!(mean_err < 0.01, "mean |r − posterior| = {mean_err}");
}

#[test]
fn soft_at_very_large_beta_equals_hard() {
    let rows = mixture(
        &[[0.0, 0.0], [4.0, 1.0], [1.0, 4.0], [5.0, 5.0]],
        1.0,
        500,
        5,
    );
    let data = Dataset::new(&rows, 2, None).unwrap();
    // Both run to their fixed points (the early-stop rule on mean moves off), where the
    // claim holds exactly.
    let hard = fit(
        &data,
        &KMeansParams::new(4)
            .seed(2)
            .shift_tolerance(0.0)
            .check()
            .unwrap(),
    )
    .unwrap();
    let soft = fit(
        &data,
        &KMeansParams::new(4)
            .seed(2)
            .shift_tolerance(0.0)
            .mode(Mode::Soft)
            .beta(Beta::Fixed(1e9))
            .check()
            .unwrap(),
    )
    .unwrap();
    for (a, b) in hard.means.iter().zip(&soft.means) {
        assert!((a - b).abs() < 1e-9, "{a} vs {b}");
    }
    assert_eq!(hard.predict(&data), soft.predict(&data));
    assert!((hard.sse - soft.sse).abs() <= 1e-9 * hard.sse);
}

/// An invented test picture: bands of colour with a dither of nearby shades, so that
/// colours repeat many times.
fn test_picture(w: usize, h: usize) -> Vec<u8> {
    let mut r = Rng::new(4, 0);
    let base = [
        [200u8, 40, 40],
        [40, 160, 60],
        [30, 60, 200],
        [230, 220, 90],
        [90, 90, 90],
    ];
    let mut v = Vec::new();
    for y in 0..h {
        for x in 0..w {
            let b = base[(x / 13 + y / 17) % base.len()];
            let j = r.below(4) as u8;
            v.extend_from_slice(&[
                b[0].saturating_add(j * 3),
                b[1].saturating_add(j),
                b[2].saturating_sub(j * 2),
                255,
            ]);
        }
    }
    v
}

/// Weighted k-means on distinct colours is the same optimisation as k-means on every
/// pixel: same means, same SSE, same label for every pixel (from the same start).
#[test]
fn histogram_path_equals_all_pixels_path() {
    let (w, h) = (120, 90);
    let px = test_picture(w, h);
    let ih = histogram::from_rgba8(&px);
    assert!(
        ih.histogram.len() < w * h / 10,
        "the picture repeats colours"
    );
    let (entry_rows, _) = entry_features(&ih.histogram, Space::Cielab);
    let weights = ih.histogram.weights();
    let hist_data = Dataset::new(&entry_rows, 3, Some(&weights)).unwrap();
    // Every pixel's own row.
    let pixel_rows: Vec<f32> = ih
        .pixel_entry
        .iter()
        .flat_map(|&e| entry_rows[e as usize * 3..e as usize * 3 + 3].to_vec())
        .collect();
    let all_data = Dataset::new(&pixel_rows, 3, None).unwrap();

    let params = KMeansParams::new(4).tolerance(0.0).check().unwrap();
    let init = kmeans_plus_plus(&hist_data, 4, &mut Rng::new(1, 0));
    let a = fit_from(&hist_data, &init, &params).unwrap();
    let b = fit_from(&all_data, &init, &params).unwrap();
    for (x, y) in a.means.iter().zip(&b.means) {
        assert!((x - y).abs() < 1e-9 * x.abs().max(1.0), "{x} vs {y}");
    }
    assert!((a.sse - b.sse).abs() < 1e-9 * a.sse);
    assert_eq!(a.hard_iterations, b.hard_iterations);
    let la = a.predict(&hist_data);
    let lb = b.predict(&all_data);
    for (p, &e) in ih.pixel_entry.iter().enumerate() {
        assert_eq!(la[e as usize], lb[p]);
    }
}

/// The accelerated loop (Hamerly bounds) makes exactly the decisions of plain Lloyd.
#[test]
fn accelerated_lloyd_equals_plain_lloyd_on_colour_data() {
    let px = test_picture(200, 150);
    let ih = histogram::from_rgba8(&px);
    let (rows, _) = entry_features(&ih.histogram, Space::Oklab);
    let weights = ih.histogram.weights();
    let data = Dataset::new(&rows, 3, Some(&weights)).unwrap();
    for k in [3, 7, 12] {
        let init = kmeans_plus_plus(&data, k, &mut Rng::new(k as u64, 0));
        assert_eq!(
            lloyd(&data, &init, Stop::exact(300), false),
            lloyd(&data, &init, Stop::exact(300), true),
            "k = {k}"
        );
    }
}

/// The same seed gives the same model whatever the thread count.
#[test]
fn thread_count_does_not_change_the_model() {
    let rows = mixture(&[[0.0, 0.0], [4.0, 1.0], [1.0, 4.0]], 1.5, 3_000, 9); // several chunks
    let data = Dataset::new(&rows, 2, None).unwrap();
    // k-means++ restarts, and annealing with its split-and-merge moves.
    for anneal in [None, Some(Anneal::default())] {
        let params = KMeansParams::new(5)
            .mode(Mode::Soft)
            .restarts(2)
            .anneal(anneal)
            .check()
            .unwrap();
        let run = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| fit(&data, &params).unwrap())
        };
        assert_eq!(run(1), run(2));
        assert_eq!(run(1), run(3));
    }
}

/// Split-and-merge moves on more rows than two work chunks, laid out so that moves must
/// happen (two dense groups sharing one mean's worth of need, two sparse wide ones served
/// by one mean): the same moves and means on 1, 2 and 3 threads.
#[test]
fn split_merge_moves_do_not_depend_on_the_thread_count() {
    let mut rows = mixture(&[[0.0, 0.0], [1.0, 0.0]], 0.05, 3_000, 4);
    rows.extend(mixture(
        &[[100.0, 0.0], [120.0, 0.0], [110.0, 40.0]],
        2.0,
        40,
        5,
    ));
    let data = Dataset::new(&rows, 2, None).unwrap();
    let init = [0.0f32, 0.0, 1.0, 0.0, 110.0, 10.0];
    let run = |threads| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| split_merge(&data, &init, 8, Stop::exact(100)))
    };
    let one = run(1);
    assert!(one.moves >= 1, "{one:?}");
    assert!(one.sse < one.start_sse);
    assert_eq!(one, run(2));
    assert_eq!(one, run(3));
}

/// Iris (Fisher 1936, as shipped by scikit-learn), k = 2..10, against the best inertia
/// scikit-learn 1.9.1 found in 200 single k-means++ starts
/// (fixtures/reference/iris_kmeans.json, `best_inertia_by_k`); measured 2026-12-02.
/// - Deterministic annealing with its split-and-merge moves and Lloyd polish equals it for
///   k ≤ 5 and stays within 0.5 % of it and below the median start up to k = 10 (at most
///   0.37 % above; 0.13 % below the best of 200 at k = 10). On Iris it also never ends
///   worse than annealing alone, which ends above the median start at k = 5, 7, 9 and 10,
///   up to 19 % above the best. (Measured, not guaranteed: moves are judged on the grid
///   summary, the final polish runs on every row.)
/// - One k-means++ start with 32 split-and-merge moves (`--split-merge 32`) equals it for
///   k ≤ 6 and stays within 1 % of it (at most 0.65 % above) and below the median start.
#[test]
fn split_merge_moves_reach_the_best_of_200_scikit_learn_starts_on_iris() {
    let (rows, doc) = iris();
    let data = Dataset::new(&rows, 4, None).unwrap();
    for row in doc["best_inertia_by_k"].as_array().unwrap() {
        let k = row["k"].as_u64().unwrap() as usize;
        let best = row["best_inertia"].as_f64().unwrap();
        let median = row["median_inertia"].as_f64().unwrap();
        let fitted = |moves: usize| {
            let schedule = Anneal {
                split_merge: moves,
                ..Anneal::default()
            };
            let params = KMeansParams::new(k).anneal(Some(schedule)).tolerance(0.0);
            fit(&data, &params.check().unwrap()).unwrap().sse
        };
        let (with, without) = (fitted(Anneal::default().split_merge), fitted(0));
        let plain_moves = {
            let params = KMeansParams::new(k).split_merge(32).tolerance(0.0);
            fit(&data, &params.check().unwrap()).unwrap().sse
        };
        let what_plain = format!("k {k}: one k-means++ start + moves {plain_moves}, best {best}");
        assert!(plain_moves <= median * (1.0 + 1e-9), "{what_plain}");
        assert!(plain_moves <= best * 1.01, "{what_plain}");
        if k <= 6 {
            assert!(plain_moves <= best * (1.0 + 1e-6), "{what_plain}");
        }
        let what = format!("k {k}: annealed {with} (no moves {without}), scikit-learn best {best}, median {median}");
        assert!(with <= without * (1.0 + 1e-9), "{what}");
        assert!(with <= median * (1.0 + 1e-9), "{what}");
        assert!(with <= best * 1.005, "{what}");
        if k <= 5 {
            assert!(with <= best * (1.0 + 1e-6), "{what}");
        }
    }
}
