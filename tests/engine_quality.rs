//! Quality of the default engine (k-means++, the global refinement, Lloyd) against
//! ground truth and against scikit-learn.
//!
//! * 2-D sets of 15 to 100 Gaussian clusters with known centres (`tests/support/gauss.rs`,
//!   seeded; overlap and size balance vary): the default finds every cluster, Centroid
//!   Index 0 (Fränti, Rezaei & Zhao 2014, Pattern Recognition 47:3034), on every set at
//!   five seeds, and textbook k-means++ and Lloyd (`Refine::None`) does not.
//! * Photographs that scikit-image and scikit-learn ship (fixtures/photos, written with
//!   the reference SSE by tests/reference/engine_sklearn.py): `reduce` at K = 16 against
//!   scikit-learn 1.9.1 KMeans on the same CIELAB pixels.
//!
//! Fränti's published S- and A-sets with their ground-truth centroid files were not
//! available offline when these tests were written (DEVELOPERS.md, "Global refinement"),
//! so only generated sets are used.

mod common;
#[path = "support/gauss.rs"]
mod gauss;

use chromasift::cluster::{fit, fit_from, Dataset, KMeansModel, KMeansParams, Refine};
use chromasift::raster::Decoded;
use chromasift::reduce::{reduce_image, ReduceOptions};
use serde_json::Value;

const SEEDS: u64 = 5;

fn fit_set(set: &gauss::Set, refine: Refine, seed: u64) -> KMeansModel {
    let data = Dataset::new(&set.points, 2, None).unwrap();
    let params = KMeansParams::new(set.spec.k)
        .seed(seed)
        .refine(refine)
        .check()
        .unwrap();
    fit(&data, &params).unwrap()
}

/// The Centroid Index on hand-made layouts, from its definition in Fränti, Rezaei & Zhao
/// (2014): map each centroid to its nearest centroid of the other solution; the centroids
/// nothing maps to are orphans; CI is the larger of the two directed orphan counts.
#[test]
fn centroid_index_counts_missing_clusters() {
    let truth = [0.0, 0.0, 10.0, 0.0, 0.0, 10.0, 10.0, 10.0];
    // Same centres, another order, small moves: 0.
    let moved = [10.2, 9.9, 0.1, 0.0, 0.0, 10.3, 9.8, 0.1];
    assert_eq!(gauss::centroid_index(&truth, &moved, 2), 0);
    // Two centroids in one cluster and none in another: one orphan each way.
    let pair = [0.0, 0.0, 0.5, 0.0, 0.0, 10.0, 10.0, 10.0];
    assert_eq!(gauss::centroid_index(&truth, &pair, 2), 1);
    assert_eq!(gauss::centroid_index(&pair, &truth, 2), 1);
    // Three centroids in one corner: two clusters missing.
    let three = [0.0, 0.0, 0.5, 0.0, 0.0, 0.5, 10.0, 10.0];
    assert_eq!(gauss::centroid_index(&truth, &three, 2), 2);
    // Fewer centroids than clusters: the missing ones are orphans.
    assert_eq!(gauss::centroid_index(&truth, &truth[..4], 2), 2);
}

/// The sets are fair: Lloyd started at the true centres stays on them (CI 0), so each set
/// has a k-means optimum with every cluster found.
#[test]
fn every_generated_set_has_a_solution_with_every_cluster() {
    for spec in gauss::SPECS {
        for seed in 0..SEEDS {
            let set = gauss::draw(spec, seed);
            assert!((15..=100).contains(&spec.k));
            let data = Dataset::new(&set.points, 2, None).unwrap();
            let params = KMeansParams::new(spec.k).check().unwrap();
            let init: Vec<f32> = set.centres.iter().map(|&c| c as f32).collect();
            let m = fit_from(&data, &init, &params).unwrap();
            assert_eq!(
                gauss::centroid_index(&m.means, &set.centres, 2),
                0,
                "{} seed {seed}",
                spec.name
            );
        }
    }
}

/// The default finds every true cluster on every set at every seed; textbook k-means++
/// and Lloyd misses some on most sets (so this check can fail).
#[test]
fn default_finds_every_cluster_and_textbook_kmeans_does_not() {
    let mut textbook_sets_missed = 0;
    let mut textbook_ci = 0;
    for spec in gauss::SPECS {
        let mut missed_here = false;
        for seed in 0..SEEDS {
            let set = gauss::draw(spec, seed);
            let model = fit_set(&set, Refine::default(), seed);
            let ci = gauss::centroid_index(&model.means, &set.centres, 2);
            assert_eq!(ci, 0, "default on {} seed {seed}: CI {ci}", spec.name);
            // No worse SSE than Lloyd from the truth (within 0.01 %: on overlapping sets a
            // few boundary points may settle differently).
            let truth: Vec<f32> = set.centres.iter().map(|&c| c as f32).collect();
            let data = Dataset::new(&set.points, 2, None).unwrap();
            let at_truth = fit_from(&data, &truth, &KMeansParams::new(spec.k).check().unwrap())
                .unwrap()
                .sse;
            assert!(
                model.sse <= at_truth * (1.0 + 1e-4),
                "{} seed {seed}: {} vs {at_truth}",
                spec.name,
                model.sse
            );
            let plain = fit_set(&set, Refine::None, seed);
            let c = gauss::centroid_index(&plain.means, &set.centres, 2);
            textbook_ci += c;
            missed_here |= c > 0;
        }
        textbook_sets_missed += usize::from(missed_here);
    }
    // Measured when written: textbook k-means++ and Lloyd missed clusters on 10 of the 12
    // sets (CI summed over sets and seeds: 72).
    assert!(
        textbook_sets_missed >= 6 && textbook_ci >= 20,
        "textbook k-means missed on {textbook_sets_missed} sets, CI sum {textbook_ci}"
    );
}

/// Swap and random swap are real alternatives: each finds every cluster on the first
/// k25-unbalanced set (by seed) where textbook k-means++ and Lloyd misses one.
#[test]
fn every_refinement_beats_textbook_kmeans_on_an_unbalanced_set() {
    let spec = gauss::SPECS
        .iter()
        .find(|s| s.name == "k25-unbalanced")
        .unwrap();
    let (seed, set) = (0..SEEDS)
        .map(|seed| (seed, gauss::draw(*spec, seed)))
        .find(|(seed, set)| {
            gauss::centroid_index(&fit_set(set, Refine::None, *seed).means, &set.centres, 2) > 0
        })
        .expect("textbook k-means misses a cluster at some seed");
    for r in [
        Refine::Swap(4),
        Refine::RandomSwap(50),
        Refine::SplitMerge(32),
    ] {
        let m = fit_set(&set, r, seed);
        assert_eq!(
            gauss::centroid_index(&m.means, &set.centres, 2),
            0,
            "{r} seed {seed}"
        );
    }
}

/// Same input and seed, same bits, on one thread and on four.
#[test]
fn refinement_is_the_same_on_any_thread_count() {
    let spec = gauss::SPECS
        .iter()
        .find(|s| s.name == "k100-touching")
        .unwrap();
    let set = gauss::draw(*spec, 2);
    let run = |threads: usize, refine: Refine| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| fit_set(&set, refine, 2))
    };
    for refine in [Refine::default(), Refine::Swap(2), Refine::RandomSwap(3)] {
        let a = run(1, refine);
        let b = run(4, refine);
        assert_eq!(a.means, b.means, "{refine}");
        assert_eq!(a.sse.to_bits(), b.sse.to_bits(), "{refine}");
    }
}

/// The refinement never moves pinned means: with pinned means it is skipped, and the
/// pinned means come back exactly.
#[test]
fn pinned_means_stay_put_with_the_default() {
    let spec = gauss::SPECS.iter().find(|s| s.name == "k20-apart").unwrap();
    let set = gauss::draw(*spec, 1);
    let data = Dataset::new(&set.points, 2, None).unwrap();
    let pinned = vec![1.5, 2.5, 400.0, 700.0];
    let params = KMeansParams::new(20)
        .pinned(pinned.clone())
        .check()
        .unwrap();
    let m = fit(&data, &params).unwrap();
    assert_eq!(&m.means[..4], &pinned[..]);
}

/// One set through `landcover` as a 2-band 32-bit float raster, unscaled: the class means
/// of the classes document find every true cluster.
#[test]
fn landcover_finds_every_cluster_of_a_raster() {
    use tiff::encoder::{colortype::ColorType, TiffEncoder};
    use tiff::tags::{PhotometricInterpretation, SampleFormat};
    /// Two float samples per pixel, as a 2-band raster stores them.
    struct TwoBandsF32;
    impl ColorType for TwoBandsF32 {
        type Inner = f32;
        const TIFF_VALUE: PhotometricInterpretation = PhotometricInterpretation::BlackIsZero;
        const BITS_PER_SAMPLE: &'static [u16] = &[32, 32];
        const SAMPLE_FORMAT: &'static [SampleFormat] =
            &[SampleFormat::IEEEFP, SampleFormat::IEEEFP];
        fn horizontal_predict(row: &[f32], result: &mut Vec<f32>) {
            result.extend_from_slice(row);
        }
    }
    let spec = gauss::SPECS
        .iter()
        .find(|s| s.name == "k50-unbalanced")
        .unwrap();
    let set = gauss::draw(*spec, 0);
    let n = set.points.len() / 2;
    let (w, h) = (100u32, n.div_ceil(100) as u32);
    // Pad the last row by repeating the first points (a few duplicates do not move the
    // optimum: the truth check below uses the same rows).
    let mut px = set.points.clone();
    let mut i = 0;
    while px.len() < (w * h * 2) as usize {
        px.extend_from_slice(&set.points[2 * i..2 * i + 2]);
        i += 1;
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("blobs.tif");
    {
        let mut enc = TiffEncoder::new(std::fs::File::create(&path).unwrap()).unwrap();
        enc.write_image::<TwoBandsF32>(w, h, &px).unwrap();
    }
    let out = dir.path().join("out");
    let k = spec.k.to_string();
    let o = common::run(
        &[
            "landcover",
            path.to_str().unwrap(),
            "-k",
            &k,
            "--scale",
            "none",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", common::stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("blobs.classes.json")).unwrap()).unwrap();
    let means: Vec<f64> = doc["classes"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|c| {
            let b = c["bands"].as_array().unwrap();
            [
                b[0]["mean"].as_f64().unwrap(),
                b[1]["mean"].as_f64().unwrap(),
            ]
        })
        .collect();
    assert_eq!(means.len(), 2 * spec.k);
    assert_eq!(gauss::centroid_index(&means, &set.centres, 2), 0);
}

fn photo_reference() -> Value {
    serde_json::from_slice(
        &std::fs::read(common::fixture("reference/engine_sklearn.json")).unwrap(),
    )
    .unwrap()
}

fn photo(p: &Value) -> Decoded {
    let img = image::open(common::fixture(p["file"].as_str().unwrap()))
        .unwrap()
        .to_rgba8();
    let (w, h) = img.dimensions();
    assert_eq!(
        (w as u64, h as u64),
        (p["width"].as_u64().unwrap(), p["height"].as_u64().unwrap())
    );
    Decoded::from_rgba8(w, h, img.into_raw())
}

/// `reduce` at K = 16 with its defaults on nine photographs shipped by scikit-image and
/// scikit-learn, against scikit-learn 1.9.1 KMeans(k-means++, n_init = 1) on the same
/// CIELAB pixels (skimage 0.26 rgb2lab; mean inertia over random_state 0..9, the expected
/// SSE of one run): geometric mean of the ratios at most 0.99, and no photo above 1.02.
/// The reference also holds n_init = 10: the default's single start must come within
/// 0.5 % of that ten-start best (geometric mean). With `Refine::None` the engine is back
/// at about one run's SSE (measured when written: 1.004), which fails the first bound.
///
/// The reference also holds the least SSE of 300 more scikit-learn starts, the best SSE
/// known for each photo (random swap from the best of 20 starts does not beat it by more
/// than 0.05 %, `benches/photo_sse_floor.py`): `reduce` must come within 0.75 % of it
/// (geometric mean).
///
/// The quality issue asked for at most 0.97 of one run. On these photographs that is below
/// every k-means solution found: the best of 300 starts is at 0.9815 of one run
/// (DEVELOPERS.md, "Global refinement").
#[test]
fn reduce_sse_against_scikit_learn_on_photographs() {
    let doc = photo_reference();
    let mut log_one = 0.0f64;
    let mut log_ten = 0.0f64;
    let mut log_floor = 0.0f64;
    let mut log_textbook = 0.0f64;
    let photos = doc["photos"].as_array().unwrap();
    for p in photos {
        let img = photo(p);
        let red = reduce_image(&img, &ReduceOptions::new(16)).unwrap();
        let sse = red.document.sse;
        let one = p["inertia_n_init_1_mean"].as_f64().unwrap();
        let ten = p["inertia_n_init_10"].as_f64().unwrap();
        assert!(sse / one <= 1.02, "{}: {sse} vs {one}", p["name"]);
        log_one += (sse / one).ln();
        log_ten += (sse / ten).ln();
        log_floor += (sse / p["inertia_best_of_300"].as_f64().unwrap()).ln();
        // The same engine without the refinement, on the same weighted CIELAB colours.
        let ih = chromasift::histogram::from_rgba8(match &img.pixels {
            chromasift::raster::Pixels::Rgba8(v) => v,
            _ => unreachable!(),
        });
        let (rows, _) =
            chromasift::reduce::entry_features(&ih.histogram, chromasift::colour::Space::Cielab);
        let weights = ih.histogram.weights();
        let data = Dataset::new(&rows, 3, Some(&weights)).unwrap();
        let plain = fit(
            &data,
            &KMeansParams::new(16).refine(Refine::None).check().unwrap(),
        )
        .unwrap();
        log_textbook += (plain.sse / one).ln();
    }
    let n = photos.len() as f64;
    let (one, ten, floor, textbook) = (
        (log_one / n).exp(),
        (log_ten / n).exp(),
        (log_floor / n).exp(),
        (log_textbook / n).exp(),
    );
    assert!(one <= 0.99, "reduce / one scikit-learn run: {one}");
    assert!(ten <= 1.005, "reduce / scikit-learn n_init=10: {ten}");
    assert!(
        floor <= 1.0075,
        "reduce / best of 300 scikit-learn starts: {floor}"
    );
    assert!(textbook > one, "textbook {textbook} vs default {one}");
}
