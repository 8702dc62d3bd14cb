//! Choosing K and β: silhouette and BIC against outside references and known mixtures,
//! `--target-delta-e` against the sweep, deterministic annealing, and the calibration of
//! the soft assignment at the automatic β.

mod common;

use chromasift::cluster::{
    assign_nearest, auto_beta, calibration, fit, lloyd, responsibility_matrix, silhouette, Anneal,
    Dataset, KMeansParams, Stop,
};
use chromasift::rng::Rng;
use chromasift::sweep::{suggest, sweep_rows, KRange, SweepOptions};
use common::{fixture, run, stderr};
use serde_json::Value;

fn gauss(r: &mut Rng) -> f64 {
    let u1 = r.uniform().max(1e-300);
    let u2 = r.uniform();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

/// Seeded draws from an isotropic Gaussian mixture of our own: `n[i]` points around
/// `centres[i]` with standard deviation `sigma[i]`. Returns rows and true components.
fn mixture(centres: &[[f64; 2]], sigma: &[f64], n: &[usize], seed: u64) -> (Vec<f32>, Vec<u32>) {
    let mut r = Rng::new(seed, 0);
    let mut rows = Vec::new();
    let mut truth = Vec::new();
    for (c, ((m, &s), &count)) in centres.iter().zip(sigma).zip(n).enumerate() {
        for _ in 0..count {
            rows.push((m[0] + s * gauss(&mut r)) as f32);
            rows.push((m[1] + s * gauss(&mut r)) as f32);
            truth.push(c as u32);
        }
    }
    (rows, truth)
}

/// Iris (Fisher 1936, as shipped by scikit-learn): our silhouette of scikit-learn's
/// KMeans labels for k = 2..6 equals `sklearn.metrics.silhouette_score` on the same
/// labels (fixtures/reference/iris_kmeans.json, from tests/reference/make_fixtures.py).
#[test]
fn silhouette_matches_scikit_learn_on_iris() {
    let doc: Value =
        serde_json::from_slice(&std::fs::read(fixture("reference/iris_kmeans.json")).unwrap())
            .unwrap();
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
    let cases = doc["silhouette_by_k"].as_array().unwrap();
    assert_eq!(cases.len(), 5);
    for case in cases {
        let labels: Vec<u32> = case["labels"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap() as u32)
            .collect();
        let want = case["silhouette"].as_f64().unwrap();
        let got = silhouette(&rows, 4, &labels).unwrap();
        // Rows are f32 here (data given to one decimal), scikit-learn used f64.
        assert!(
            (got - want).abs() < 1e-6,
            "k = {}: {got} vs {want}",
            case["k"]
        );
    }
}

/// Well-separated mixtures of our own with K = 3, 5 and 8 components: both the
/// silhouette and the BIC suggest the true K.
#[test]
fn silhouette_and_bic_pick_the_true_k_on_separated_mixtures() {
    for (true_k, seed) in [(3usize, 1u64), (5, 2), (8, 3)] {
        let centres: Vec<[f64; 2]> = (0..true_k)
            .map(|i| {
                let a = std::f64::consts::TAU * i as f64 / true_k as f64;
                let radius = 6.0 * true_k as f64 / std::f64::consts::PI;
                [radius * a.cos(), radius * a.sin()]
            })
            .collect();
        let (rows, _) = mixture(&centres, &vec![1.0; true_k], &vec![300; true_k], seed);
        let data = Dataset::new(&rows, 2, None).unwrap();
        let mut opts = SweepOptions::new(KRange { min: 2, max: 12 });
        opts.silhouette_sample = 1200;
        let table = sweep_rows(&data, None, chromasift::colour::Space::Cielab, &opts);
        assert_eq!(table.len(), 11);
        let s = suggest(&table);
        assert_eq!(
            s["silhouette"], true_k,
            "silhouette, true K {true_k}: {table:?}"
        );
        assert_eq!(s["bic"], true_k, "BIC, true K {true_k}: {table:?}");
        // ΔE columns are absent for non-colour rows; SSE falls with K along the path.
        assert!(table.iter().all(|r| r.mean_delta_e2000.is_none()));
    }
}

fn sweep_doc(dir: &std::path::Path) -> Value {
    serde_json::from_slice(&std::fs::read(dir.join("sweep.json")).unwrap()).unwrap()
}

/// `reduce --target-delta-e T` returns the smallest K whose mean (or 95th-percentile)
/// ΔE2000 in the sweep is at most T, with the same ΔE2000 as that sweep row.
#[test]
fn target_delta_e_returns_the_smallest_qualifying_k_of_the_sweep() {
    let dir = tempfile::tempdir().unwrap();
    let poster = fixture("demo/harbour-poster.png");
    let p = poster.to_str().unwrap();
    let sw = dir.path().join("sweep");
    let o = run(
        &["sweep", p, "--k", "1..12", "-o", sw.to_str().unwrap()],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    for name in ["sweep.csv", "sweep.json", "sweep.svg"] {
        assert!(sw.join(name).is_file(), "{name}");
    }
    let doc = sweep_doc(&sw);
    let rows = doc["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 12);
    let csv = std::fs::read_to_string(sw.join("sweep.csv")).unwrap();
    // The first seven columns are as before; the mixture, stability and family columns
    // follow, then the mark of the recommended K.
    assert!(csv.starts_with(
        "k,sse,mean_delta_e2000,p95_delta_e2000,mean_uncertainty,silhouette,bic,bic_full,icl,stability,closest_delta_e2000,smallest_share,families,recommended\n"
    ));
    let svg = std::fs::read_to_string(sw.join("sweep.svg")).unwrap();
    assert!(
        svg.starts_with("<svg") && svg.contains("suggested") && svg.trim_end().ends_with("</svg>")
    );
    for key in ["silhouette", "bic"] {
        let k = doc["suggested"][key].as_u64().unwrap();
        assert!((1..=12).contains(&k), "{key}");
    }

    for (stat, flag) in [
        ("mean_delta_e2000", None),
        ("p95_delta_e2000", Some("--target-p95")),
    ] {
        // A target between two rows' values, so exactly one K is the smallest that meets it.
        let values: Vec<f64> = rows.iter().map(|r| r[stat].as_f64().unwrap()).collect();
        let target = (values[5] + values[6]) / 2.0;
        let want = rows
            .iter()
            .zip(&values)
            .find(|(_, &v)| v <= target)
            .map(|(r, _)| r["k"].as_u64().unwrap())
            .unwrap();
        let out = dir.path().join(format!("t-{stat}"));
        let t = format!("{target}");
        let mut args = vec!["reduce", p, "--target-delta-e", &t, "--k-max", "12", "-o"];
        let os = out.to_str().unwrap().to_string();
        args.push(&os);
        if let Some(f) = flag {
            args.push(f);
        }
        let o = run(&args, &[]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        let err = stderr(&o);
        assert!(err.contains(&format!("chose K = {want}")), "{err}");
        let pal: Value = serde_json::from_slice(
            &std::fs::read(out.join("harbour-poster.palette.json")).unwrap(),
        )
        .unwrap();
        assert_eq!(pal["k"].as_u64().unwrap(), want, "{stat}");
        if stat == "mean_delta_e2000" {
            let row = &rows[(want - 1) as usize];
            let a = pal["mean_delta_e2000"].as_f64().unwrap();
            let b = row["mean_delta_e2000"].as_f64().unwrap();
            assert!((a - b).abs() <= 1e-9 * b, "{a} vs {b}");
            assert!(a <= target);
        }
    }
}

#[test]
fn sweep_reads_a_multi_band_scene_and_refuses_bad_ranges() {
    let dir = tempfile::tempdir().unwrap();
    let scene = fixture("rasters/utm_u16_4band_strips.tif");
    if !scene.is_file() {
        panic!("fixture missing: {}", scene.display());
    }
    let out = dir.path().join("s");
    let o = run(
        &[
            "sweep",
            scene.to_str().unwrap(),
            "--k",
            "2..6",
            "--bands",
            "1,2,3,4",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let doc = sweep_doc(&out);
    let rows = doc["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 5);
    assert!(rows.iter().all(|r| r["mean_delta_e2000"].is_null()));
    assert!(rows.iter().all(|r| r["silhouette"].as_f64().is_some()));

    for bad in ["0..4", "5..2", "x"] {
        let out = dir.path().join("bad");
        let o = run(
            &[
                "sweep",
                scene.to_str().unwrap(),
                "--k",
                bad,
                "-o",
                out.to_str().unwrap(),
            ],
            &[],
        );
        assert_eq!(o.status.code(), Some(2), "{bad}");
        let e = stderr(&o);
        assert!(
            (e.contains("K range") || e.contains("k must be")) && !e.contains("panicked"),
            "{e}"
        );
        assert!(!out.exists());
    }
}

/// Annealing (Rose, Gurewitz & Fox 1990) on a seeded hard case of our own: one wide
/// group of 3000 points and five small tight groups of 40 on a ring around it (K = 6).
/// The annealed fit ends no higher than its own Lloyd polish start, and beats most
/// single-start k-means++ runs (Arthur & Vassilvitskii 2007) of the same K.
#[test]
fn annealing_beats_single_start_kmeans_plus_plus_on_unbalanced_groups() {
    let mut centres = vec![[0.0, 0.0]];
    let mut sigma = vec![3.0];
    let mut n = vec![3000];
    for i in 0..5 {
        let a = std::f64::consts::TAU * i as f64 / 5.0;
        centres.push([10.0 * a.cos(), 10.0 * a.sin()]);
        sigma.push(0.5);
        n.push(40);
    }
    let (rows, _) = mixture(&centres, &sigma, &n, 7);
    let data = Dataset::new(&rows, 2, None).unwrap();
    let k = 6;

    let a = chromasift::cluster::anneal(&data, k, &Anneal::default(), 1, 1e-6);
    let start: Vec<f32> = a.means.iter().map(|&v| v as f32).collect();
    let (_, start_sse) = assign_nearest(&data, &start);
    let polished = lloyd(&data, &start, Stop::exact(300), true);
    assert!(polished.sse <= start_sse * (1.0 + 1e-12));
    assert!(a.stages > 10);

    let mut singles: Vec<f64> = (0..20)
        .map(|seed| {
            // Textbook k-means++ and Lloyd: the default's global refinement turned off.
            let p = KMeansParams::new(k)
                .seed(seed)
                .refine(chromasift::cluster::Refine::None)
                .check()
                .unwrap();
            fit(&data, &p).unwrap().sse
        })
        .collect();
    singles.sort_by(f64::total_cmp);
    // With the split-and-merge moves (the default) and without them (annealing alone).
    for moves in [Anneal::default().split_merge, 0] {
        let schedule = Anneal {
            split_merge: moves,
            ..Anneal::default()
        };
        let annealed = fit(
            &data,
            &KMeansParams::new(k).anneal(Some(schedule)).check().unwrap(),
        )
        .unwrap();
        let beaten = singles
            .iter()
            .filter(|&&s| s > annealed.sse * (1.0 + 1e-6))
            .count();
        assert!(
            annealed.sse <= singles[10],
            "moves {moves}: {} vs median {}",
            annealed.sse,
            singles[10]
        );
        assert!(
            beaten >= 15,
            "moves {moves}: beats {beaten} of 20: {} vs {singles:?}",
            annealed.sse
        );
    }
}

#[test]
fn bad_annealing_schedules_are_refused() {
    for (s, e, f) in [
        (0.0, 10.0, 1.2),
        (5.0, 1.0, 1.2),
        (0.5, 10.0, 1.0),
        (0.5, f64::NAN, 1.2),
    ] {
        let r = KMeansParams::new(3)
            .anneal(Some(Anneal {
                start: s,
                end: e,
                factor: f,
                ..Anneal::default()
            }))
            .check();
        assert!(r.is_err(), "{s} {e} {f}");
    }
    let dir = tempfile::tempdir().unwrap();
    let o = run(
        &[
            "reduce",
            fixture("demo/harbour-poster.png").to_str().unwrap(),
            "--anneal",
            "--anneal-factor",
            "0.9",
            "-o",
            dir.path().join("x").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("annealing schedule"), "{}", stderr(&o));
}

/// Calibration of the soft assignment at the automatic β = 1/σ² (σ² the pooled
/// within-cluster variance of the hard fit): on draws from a known equal-weight
/// isotropic Gaussian mixture (ours: three components 3.5σ apart), the predicted
/// probability of "row i came from component j" matches the observed frequency within
/// 0.05 in every bin holding at least 300 (row, component) pairs. For such a mixture
/// the responsibilities at β = 1/σ² are the exact posterior (Bishop 2006, PRML §9.3.2),
/// so the remaining error is that of the fitted means and σ².
#[test]
fn soft_assignment_at_auto_beta_is_calibrated() {
    let centres = [[0.0, 0.0], [3.5, 0.0], [1.75, 3.03]];
    let (rows, truth) = mixture(&centres, &[1.0; 3], &[4000; 3], 11);
    let data = Dataset::new(&rows, 2, None).unwrap();
    let model = fit(&data, &KMeansParams::new(3).seed(5).check().unwrap()).unwrap();
    let beta = auto_beta(model.sse, data.total_weight(), 2).unwrap();
    // Map fitted clusters to true components by nearest centre.
    let map: Vec<u32> = (0..3)
        .map(|c| {
            let m = &centres[c];
            (0..3)
                .min_by(|&a, &b| {
                    let da = (model.means[a * 2] - m[0]).powi(2)
                        + (model.means[a * 2 + 1] - m[1]).powi(2);
                    let db = (model.means[b * 2] - m[0]).powi(2)
                        + (model.means[b * 2 + 1] - m[1]).powi(2);
                    da.total_cmp(&db)
                })
                .unwrap() as u32
        })
        .collect();
    let truth_in_clusters: Vec<u32> = truth.iter().map(|&t| map[t as usize]).collect();
    let resp = responsibility_matrix(&data, &model.means, beta);
    let table = calibration(&resp, 3, &truth_in_clusters, 10);
    let mut checked = 0;
    for b in &table {
        if b.count >= 300 {
            checked += 1;
            assert!(
                (b.observed - b.mean_predicted).abs() <= 0.05,
                "bin {:.1}..{:.1}: predicted {:.3}, observed {:.3} over {}",
                b.lo,
                b.hi,
                b.mean_predicted,
                b.observed,
                b.count
            );
        }
    }
    assert!(checked >= 6, "{table:?}");
}

/// `separate --target-delta-e T` uses the fewest inks whose separation is within T: the
/// same count as the smallest `-k` run (without region merging) whose mean ΔE2000 ≤ T.
#[test]
fn separate_target_uses_the_fewest_inks_within_the_target() {
    let dir = tempfile::tempdir().unwrap();
    let art = fixture("demo/harbour-poster.png");
    let inks = fixture("demo/quayside-inks.csv");
    let (a, l) = (art.to_str().unwrap(), inks.to_str().unwrap());
    let mean_for = |args: &[&str]| -> (u64, f64, String) {
        let out = dir.path().join("o");
        let mut v = vec![
            "separate",
            a,
            "--inks",
            l,
            "--min-area",
            "1",
            "--json",
            "-o",
        ];
        let os = out.to_str().unwrap().to_string();
        v.push(&os);
        v.extend_from_slice(args);
        let o = run(&v, &[]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        let d: Value = serde_json::from_slice(&o.stdout).unwrap();
        std::fs::remove_dir_all(&out).unwrap();
        (
            d["inks"].as_array().unwrap().len() as u64,
            d["mean_delta_e2000"].as_f64().unwrap(),
            stderr(&o),
        )
    };
    // The target picks among the lowest-total choices, so compare with those.
    let per_k: Vec<f64> = (1..=5)
        .map(|k| mean_for(&["-k", &k.to_string(), "--objective", "plain"]).1)
        .collect();
    let target = (per_k[2] + per_k[3]) / 2.0;
    let want = 1 + per_k.iter().position(|&m| m <= target).unwrap() as u64;
    let t = format!("{target}");
    let (n, mean, err) = mean_for(&["--target-delta-e", &t, "--k-max", "5"]);
    assert_eq!(n, want, "{err}");
    assert!(mean <= target);
    assert!(err.contains(&format!("chose {want} inks")), "{err}");
}

/// On a photograph the criteria disagree and the recommendation says it is not to be
/// leaned on; where they agree (the demo poster), it does not.
#[test]
fn a_recommendation_no_criterion_backs_says_so() {
    let dir = tempfile::tempdir().unwrap();
    for (art, k) in [
        ("photos/coffee.png", "2..12"),
        ("demo/harbour-poster.png", "2..10"),
    ] {
        let out = dir.path().join(art.replace('/', "-"));
        let input = fixture(art);
        let o = run(
            &[
                "sweep",
                input.to_str().unwrap(),
                "--k",
                k,
                "-o",
                out.to_str().unwrap(),
            ],
            &[],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        let doc: Value =
            serde_json::from_slice(&std::fs::read(out.join("sweep.json")).unwrap()).unwrap();
        let r = &doc["recommended"];
        let none = r["agreeing"].as_array().unwrap().is_empty();
        let text = r["agreement"].as_str().unwrap();
        assert_eq!(text.contains("low confidence"), none, "{art}: {text}");
        assert_eq!(stderr(&o).contains("low confidence"), none, "{art}");
        // The photograph is the case this is for.
        assert_eq!(none, art.starts_with("photos/"), "{art}: {text}");
    }
}
