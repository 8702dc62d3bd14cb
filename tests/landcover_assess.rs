//! `landcover-assess` against outside references: scikit-learn 1.9.1 and scipy 1.17.1 on
//! an invented class raster, its reference raster and reference points
//! (`tests/reference/landcover_accuracy.py` → `fixtures/reference/landcover_accuracy.json`:
//! contingency table, Hungarian matching by `linear_sum_assignment`, `confusion_matrix`,
//! `cohen_kappa_score`, `adjusted_rand_score`), and the numerical example of Olofsson et
//! al. (2014, Remote Sensing of Environment 148:42, section 5) for the error-adjusted
//! areas (published figures recalled from memory, checked in the script against a
//! recomputation from the example's counts).

mod common;

use chromasift::landcover::Confusion;
use common::{fixture, run, stderr};
use serde_json::Value;
use std::path::Path;
use tiff::encoder::{colortype, TiffEncoder};
use tiff::tags::Tag;

/// Projected, pixel is area, WGS 84 / UTM 33N, metres.
const GEOKEYS: [u16; 20] = [
    1, 1, 0, 4, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32633, 3076, 0, 1, 9001,
];

fn reference() -> Value {
    let text = std::fs::read_to_string(fixture("reference/landcover_accuracy.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn geo_tags<W: std::io::Write + std::io::Seek, K: tiff::encoder::TiffKind>(
    enc: &mut tiff::encoder::DirectoryEncoder<'_, W, K>,
    origin: (f64, f64),
    pixel: f64,
) {
    enc.write_tag(Tag::Unknown(33550), &[pixel, pixel, 0.0][..])
        .unwrap();
    enc.write_tag(
        Tag::Unknown(33922),
        &[0.0, 0.0, 0.0, origin.0, origin.1, 0.0][..],
    )
    .unwrap();
    enc.write_tag(Tag::Unknown(34735), &GEOKEYS[..]).unwrap();
}

fn write_u8(path: &Path, w: u32, h: u32, v: &[u8], origin: (f64, f64), pixel: f64) {
    let mut enc = TiffEncoder::new(std::fs::File::create(path).unwrap()).unwrap();
    let mut img = enc.new_image::<colortype::Gray8>(w, h).unwrap();
    geo_tags(img.encoder(), origin, pixel);
    img.write_data(v).unwrap();
}

fn write_u16(path: &Path, w: u32, h: u32, v: &[u16], origin: (f64, f64), pixel: f64) {
    let mut enc = TiffEncoder::new(std::fs::File::create(path).unwrap()).unwrap();
    let mut img = enc.new_image::<colortype::Gray16>(w, h).unwrap();
    geo_tags(img.encoder(), origin, pixel);
    img.write_data(v).unwrap();
}

struct Scene {
    dir: tempfile::TempDir,
    scene: Value,
}

impl Scene {
    fn new() -> Scene {
        let r = reference();
        let scene = r["scene"].clone();
        let dir = tempfile::tempdir().unwrap();
        let (w, h) = (
            scene["width"].as_u64().unwrap() as u32,
            scene["height"].as_u64().unwrap() as u32,
        );
        let origin = (
            scene["origin"][0].as_f64().unwrap(),
            scene["origin"][1].as_f64().unwrap(),
        );
        let px = scene["pixel_m"].as_f64().unwrap();
        let ints = |k: &str| -> Vec<u64> {
            scene[k]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_u64().unwrap())
                .collect()
        };
        let cls: Vec<u8> = ints("classes").iter().map(|&v| v as u8).collect();
        let rf: Vec<u16> = ints("reference").iter().map(|&v| v as u16).collect();
        write_u8(
            &dir.path().join("valley.classes.tif"),
            w,
            h,
            &cls,
            origin,
            px,
        );
        write_u16(&dir.path().join("survey.tif"), w, h, &rf, origin, px);
        let mut csv = String::from("id,x,y,label\n");
        for (i, p) in scene["points"].as_array().unwrap().iter().enumerate() {
            csv.push_str(&format!("{i},{},{},{}\n", p[0], p[1], p[2]));
        }
        std::fs::write(dir.path().join("points.csv"), csv).unwrap();
        Scene { dir, scene }
    }

    fn path(&self, name: &str) -> String {
        self.dir.path().join(name).to_str().unwrap().to_string()
    }

    fn assess(&self, extra: &[&str]) -> Value {
        let out = self.path("out");
        let classes = self.path("valley.classes.tif");
        let mut args = vec!["landcover-assess", classes.as_str(), "-o", out.as_str()];
        args.extend_from_slice(extra);
        let o = run(&args, &[]);
        assert!(o.status.success(), "{}", stderr(&o));
        let text =
            std::fs::read_to_string(self.dir.path().join("out/valley.assessment.json")).unwrap();
        serde_json::from_str(&text).unwrap()
    }
}

/// Our document against scikit-learn's figures for one matching.
fn check_against_sklearn(doc: &Value, want: &Value, matching: &str) {
    let close = |a: f64, b: f64, what: &str| assert!((a - b).abs() < 1e-12, "{what}: {a} vs {b}");
    close(
        doc["adjusted_rand_index"].as_f64().unwrap(),
        want["adjusted_rand_score"].as_f64().unwrap(),
        "adjusted Rand index",
    );
    let m = &want[matching];
    for cl in doc["cluster_labels"].as_array().unwrap() {
        let c = cl["class"].as_u64().unwrap().to_string();
        assert_eq!(
            cl["label"].as_str().unwrap(),
            m["cluster_to_label"][&c].to_string(),
            "cluster {c}"
        );
    }
    // Ours: rows = map labels; scikit-learn's: rows = reference (y_true).
    let labels: Vec<String> = want["labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.to_string())
        .collect();
    let conf = &doc["confusion"];
    let ours_labels: Vec<String> = conf["labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap().to_string())
        .collect();
    assert_eq!(ours_labels, labels);
    let sk = &m["confusion_matrix_true_rows"];
    for i in 0..labels.len() {
        for j in 0..labels.len() {
            assert_eq!(
                conf["counts"][i][j], sk[j][i],
                "cell map {i} / reference {j}"
            );
        }
    }
    close(
        doc["kappa"].as_f64().unwrap(),
        m["cohen_kappa_score"].as_f64().unwrap(),
        "kappa",
    );
    close(
        doc["overall_accuracy"].as_f64().unwrap(),
        m["accuracy"].as_f64().unwrap(),
        "accuracy",
    );
    // Producer's and user's accuracy from scikit-learn's matrix (diagonal over sums).
    for (k, pl) in doc["per_label"].as_array().unwrap().iter().enumerate() {
        let n = labels.len();
        let row_true: u64 = (0..n).map(|j| sk[k][j].as_u64().unwrap()).sum();
        let col_pred: u64 = (0..n).map(|i| sk[i][k].as_u64().unwrap()).sum();
        let hit = sk[k][k].as_f64().unwrap();
        close(
            pl["producers_accuracy"].as_f64().unwrap(),
            hit / row_true as f64,
            "producer's",
        );
        close(
            pl["users_accuracy"].as_f64().unwrap(),
            hit / col_pred as f64,
            "user's",
        );
    }
}

#[test]
fn reference_raster_figures_equal_scikit_learn() {
    let s = Scene::new();
    let survey = s.path("survey.tif");
    let want = &s.scene["raster"];
    for matching in ["hungarian", "majority"] {
        let doc = s.assess(&["--reference", survey.as_str(), "--match", matching]);
        check_against_sklearn(&doc, want, matching);
        // Map areas: every classified pixel's ground area, whether or not it has a
        // reference, as `landcover` measures it. On UTM a 30 m grid pixel covers 900 / k²
        // m² of ground, k the projection's scale, k = k0 (1 + x² / 2R²) to first order
        // (Snyder 1987, "Map Projections: A Working Manual", USGS PP 1395, §8), x the
        // distance from the central meridian (the scene's centre: 100 360 m), k0 0.9996,
        // R 6371 km.
        let pixels: u64 = s.scene["class_pixels"]
            .as_object()
            .unwrap()
            .values()
            .map(|v| v.as_u64().unwrap())
            .sum();
        assert_eq!(doc["area_unit"], "m2");
        assert_eq!(doc["area_method"], "ellipsoid-geodesic-lattice");
        let (x, r) = (100_360.0f64, 6_371_000.0f64);
        let k = 0.9996 * (1.0 + x * x / (2.0 * r * r));
        let expected = pixels as f64 * 900.0 / (k * k);
        let total = doc["areas"]["total_area"].as_f64().unwrap();
        assert!(
            ((total - expected) / expected).abs() < 1e-5,
            "{total} against {expected}"
        );
    }
    let csv = std::fs::read_to_string(s.dir.path().join("out/valley.confusion.csv")).unwrap();
    assert!(
        csv.starts_with("map \\ reference,1,2,3,4,total,users_accuracy\n"),
        "{csv}"
    );
}

#[test]
fn reference_points_figures_equal_scikit_learn() {
    let s = Scene::new();
    let points = s.path("points.csv");
    let doc = s.assess(&["--points", points.as_str()]);
    assert_eq!(doc["points_outside"], 3);
    assert_eq!(doc["units"], 80);
    check_against_sklearn(&doc, &s.scene["points_figures"], "hungarian");
}

#[test]
fn error_adjusted_areas_reproduce_olofsson_2014() {
    let r = reference();
    let o = &r["olofsson"];
    let labels: Vec<String> = o["labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap().into())
        .collect();
    let counts: Vec<Vec<u64>> = o["counts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_u64().unwrap())
                .collect()
        })
        .collect();
    let mapped: Vec<f64> = o["mapped_pixels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let est = Confusion { labels, counts }
        .area_estimates(&mapped)
        .unwrap();
    let c = &o["computed"];
    let rel = |a: f64, b: f64, what: &str| {
        assert!(
            (a - b).abs() <= 1e-9 * b.abs().max(1.0),
            "{what}: {a} vs {b}"
        )
    };
    for (j, e) in est.labels.iter().enumerate() {
        rel(e.area, c["area_pixels"][j].as_f64().unwrap(), "area");
        rel(
            e.area_ci95,
            c["area_ci95_pixels"][j].as_f64().unwrap(),
            "area CI",
        );
        rel(
            e.users_accuracy.unwrap(),
            c["users_accuracy"][j].as_f64().unwrap(),
            "UA",
        );
        rel(
            e.users_accuracy_ci95.unwrap(),
            c["users_accuracy_ci95"][j].as_f64().unwrap(),
            "UA CI",
        );
        rel(
            e.producers_accuracy.unwrap(),
            c["producers_accuracy"][j].as_f64().unwrap(),
            "PA",
        );
        rel(
            e.producers_accuracy_ci95.unwrap(),
            c["producers_accuracy_ci95"][j].as_f64().unwrap(),
            "PA CI",
        );
    }
    rel(
        est.overall_accuracy,
        c["overall_accuracy"].as_f64().unwrap(),
        "OA",
    );
    rel(
        est.overall_accuracy_ci95,
        c["overall_accuracy_ci95"].as_f64().unwrap(),
        "OA CI",
    );
    // The published figures (recalled from memory; see the script): deforestation
    // 235 086 ± 68 418 pixels = 21 158 ± 6 158 ha at 0.09 ha a pixel, UA 0.88 ± 0.07,
    // PA 0.75 ± 0.21, overall accuracy 0.95.
    let p = &o["recalled"];
    let d = &est.labels[0];
    assert_eq!(
        d.area.round(),
        p["deforestation_area_pixels"].as_f64().unwrap()
    );
    assert_eq!(
        d.area_ci95.round(),
        p["deforestation_area_ci95_pixels"].as_f64().unwrap()
    );
    assert_eq!(
        (d.area * 0.09).round(),
        p["deforestation_area_ha"].as_f64().unwrap()
    );
    let r2 = |x: f64| (x * 100.0).round() / 100.0;
    assert_eq!(
        r2(d.users_accuracy.unwrap()),
        p["deforestation_users_accuracy"].as_f64().unwrap()
    );
    assert_eq!(
        r2(d.producers_accuracy.unwrap()),
        p["deforestation_producers_accuracy"].as_f64().unwrap()
    );
    assert_eq!(
        r2(d.producers_accuracy_ci95.unwrap()),
        p["deforestation_producers_accuracy_ci95"].as_f64().unwrap()
    );
    assert_eq!(
        r2(est.overall_accuracy),
        p["overall_accuracy"].as_f64().unwrap()
    );
}

#[test]
fn a_reference_on_another_grid_is_refused() {
    let s = Scene::new();
    let other = s.dir.path().join("small.tif");
    write_u16(&other, 10, 10, &[1u16; 100], (600000.0, 4500000.0), 30.0);
    let shifted = s.dir.path().join("shifted.tif");
    let (w, h) = (24u32, 18u32);
    write_u16(
        &shifted,
        w,
        h,
        &vec![1u16; (w * h) as usize],
        (600030.0, 4500000.0),
        30.0,
    );
    for (f, word) in [(&other, "same grid"), (&shifted, "georeferencing")] {
        let out = s.path("refused");
        let classes = s.path("valley.classes.tif");
        let o = run(
            &[
                "landcover-assess",
                classes.as_str(),
                "--reference",
                f.to_str().unwrap(),
                "-o",
                out.as_str(),
            ],
            &[],
        );
        let e = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{e}");
        assert_eq!(e.trim_end().lines().count(), 1, "{e}");
        assert!(
            e.contains(f.file_name().unwrap().to_str().unwrap()) && e.contains(word),
            "{e}"
        );
        assert!(common::files_in(Path::new(&out)).is_empty());
    }
    let bad = s.dir.path().join("bad.csv");
    std::fs::write(&bad, "x,y,label\n600015,4499985,1\n600045,north,2\n").unwrap();
    let o = run(
        &[
            "landcover-assess",
            s.path("valley.classes.tif").as_str(),
            "--points",
            bad.to_str().unwrap(),
            "-o",
            s.path("refused").as_str(),
        ],
        &[],
    );
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(e.contains("bad.csv") && e.contains("line 3"), "{e}");
}
