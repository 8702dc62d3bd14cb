//! `chromasift separate`: colour management against colour-science, the ink choice
//! against brute force, the plates' geometry rules, and bad libraries.

mod common;

use chromasift::colour::adapt;
use chromasift::inks::Ink;
use chromasift::regions;
use chromasift::rng::Rng;
use chromasift::select::{self, CostTable};
use common::{files_in, fixture, run, stderr, write_rgb, write_rgba};
use serde_json::Value;
use std::path::Path;

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

fn arr3(v: &Value) -> [f64; 3] {
    let a = v.as_array().unwrap();
    [
        a[0].as_f64().unwrap(),
        a[1].as_f64().unwrap(),
        a[2].as_f64().unwrap(),
    ]
}

/// Bradford (Lam 1985, ICC.1 Annex E) against colour-science 0.4.7: the cone matrix, the
/// D65 → D50 (ICC white X 0.9642, Y 1.0, Z 0.8249) matrix from the same whites, and the
/// adapted CIELAB D50 of 25 colours from their XYZ. Fixture:
/// fixtures/reference/bradford_d65_to_d50.json (tests/reference/make_fixtures.py).
#[test]
fn bradford_matches_colour_science() {
    let doc = json(&fixture("reference/bradford_d65_to_d50.json"));
    let cone = doc["cone_matrix_bradford"].as_array().unwrap();
    for (i, row) in cone.iter().enumerate() {
        assert_eq!(arr3(row), adapt::BRADFORD[i]);
    }
    assert_eq!(arr3(&doc["white_d50_icc_xyz"]), adapt::D50_ICC);
    let m = adapt::bradford_matrix(arr3(&doc["white_d65_xyz"]), adapt::D50_ICC);
    for (i, row) in doc["matrix"].as_array().unwrap().iter().enumerate() {
        let want = arr3(row);
        for j in 0..3 {
            assert!(
                (m[i][j] - want[j]).abs() < 1e-12,
                "matrix[{i}][{j}] {} vs {}",
                m[i][j],
                want[j]
            );
        }
    }
    let colours = doc["colours"].as_array().unwrap();
    assert!(colours.len() >= 25);
    for c in colours {
        let xyz50 = chromasift::colour::mul(&m, arr3(&c["xyz_d65"]));
        let want50 = arr3(&c["xyz_d50"]);
        for d in 0..3 {
            assert!((xyz50[d] - want50[d]).abs() < 1e-12);
        }
        let lab = chromasift::colour::xyz_to_lab(xyz50, adapt::D50_ICC);
        let want = arr3(&c["lab_d50"]);
        for d in 0..3 {
            assert!(
                (lab[d] - want[d]).abs() < 1e-9,
                "{}: {lab:?} vs {want:?}",
                c["name"]
            );
        }
    }
}

/// An invented artwork histogram and invented library, seeded.
fn random_case(seed: u64, n_entries: usize, n_inks: usize) -> (Vec<[f64; 3]>, Vec<f64>, Vec<Ink>) {
    let mut r = Rng::new(seed, 0);
    let mut lab = || {
        [
            r.uniform() * 100.0,
            r.uniform() * 120.0 - 60.0,
            r.uniform() * 120.0 - 60.0,
        ]
    };
    // Entries around a few artwork colours.
    let centres: Vec<[f64; 3]> = (0..5).map(|_| lab()).collect();
    let mut r2 = Rng::new(seed, 1);
    let entries: Vec<[f64; 3]> = (0..n_entries)
        .map(|i| {
            let c = centres[i % centres.len()];
            [
                c[0] + r2.uniform() * 8.0 - 4.0,
                c[1] + r2.uniform() * 8.0 - 4.0,
                c[2] + r2.uniform() * 8.0 - 4.0,
            ]
        })
        .collect();
    let weights: Vec<f64> = (0..n_entries)
        .map(|_| 1.0 + (r2.uniform() * 50.0).floor())
        .collect();
    let inks = (0..n_inks)
        .map(|i| Ink::from_lab(&format!("ink {i}"), lab()))
        .collect();
    (entries, weights, inks)
}

/// The swap search finds the brute-force best subset, or comes within 3 %, on small
/// libraries (with and without a substrate and forced inks).
#[test]
fn ink_choice_matches_brute_force_on_small_libraries() {
    let mut equal = 0;
    let mut cases = 0;
    for seed in 0..24u64 {
        let (entries, weights, inks) = random_case(seed, 300, 8 + (seed as usize % 5));
        let k = 2 + (seed as usize % 3);
        let substrate = (seed % 2 == 0).then_some([95.0, 0.0, 2.0]);
        let forced: Vec<usize> = if seed % 3 == 0 { vec![1] } else { vec![] };
        let t = CostTable::new(&entries, &weights, &inks, substrate);
        let best = select::choose_exhaustive(&t, k, &forced);
        let engine = chromasift::cluster::EngineOptions {
            seed,
            ..Default::default()
        };
        let swaps = select::choose_by_swaps(&select::InkSearch {
            t: &t,
            entry_labs: &entries,
            inks: &inks,
            k,
            forced: &forced,
            engine: &engine,
        });
        assert!(forced.iter().all(|f| swaps.chosen.contains(f)));
        assert_eq!(swaps.chosen.len(), k);
        assert!(
            swaps.total_delta_e <= best.total_delta_e * 1.03 + 1e-9,
            "seed {seed}: swaps {} vs best {}",
            swaps.total_delta_e,
            best.total_delta_e
        );
        // The brute force really is the minimum of the objective.
        assert!(
            (t.objective(&best.chosen) - best.total_delta_e).abs()
                < 1e-6 * best.total_delta_e.max(1.0)
        );
        cases += 1;
        if swaps.chosen == best.chosen {
            equal += 1;
        }
    }
    assert!(
        equal * 10 >= cases * 8,
        "swaps found the best set in only {equal} of {cases} cases"
    );
}

fn separate(args: &[&str]) -> std::process::Output {
    let mut v = vec!["separate"];
    v.extend_from_slice(args);
    run(&v, &[])
}

fn read_plate(path: &Path) -> Vec<bool> {
    let img = image::open(path).unwrap().to_luma8();
    img.pixels().map(|p| p[0] == 0).collect()
}

fn run_poster(out: &Path, extra: &[&str]) -> Value {
    let input = fixture("demo/harbour-poster.png");
    let inks = fixture("demo/quayside-inks.csv");
    let mut args = vec![
        input.to_str().unwrap(),
        "--inks",
        inks.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = separate(&args);
    assert!(o.status.success(), "{}", stderr(&o));
    json(&out.join("harbour-poster.separation.json"))
}

#[test]
fn plates_cover_every_inked_pixel_once_and_match_the_document() {
    let dir = tempfile::tempdir().unwrap();
    let doc = run_poster(
        dir.path(),
        &["-k", "4", "--substrate", "#ffffff", "--min-area", "20"],
    );
    for f in [
        "tool_version",
        "substrate",
        "min_area",
        "trap",
        "mean_delta_e2000",
        "inks",
    ] {
        assert!(doc.get(f).is_some(), "{f}");
    }
    assert_eq!(doc["substrate"], "#ffffff");
    assert_eq!(doc["selection"], "exhaustive");
    let inks = doc["inks"].as_array().unwrap();
    assert_eq!(inks.len(), 4);
    let plates: Vec<Vec<bool>> = inks
        .iter()
        .map(|i| read_plate(&dir.path().join(i["plate"].as_str().unwrap())))
        .collect();
    let n = plates[0].len();
    let mut labels = vec![4u16; n];
    let mut inked = 0u64;
    for p in 0..n {
        let hits: Vec<usize> = (0..4).filter(|&i| plates[i][p]).collect();
        assert!(
            hits.len() <= 1,
            "pixel {p} on {} plates without trapping",
            hits.len()
        );
        if let Some(&i) = hits.first() {
            labels[p] = i as u16;
            inked += 1;
        }
    }
    let mut cov = 0.0;
    let mut last_l = f64::INFINITY;
    for (i, ink) in inks.iter().enumerate() {
        let px = plates[i].iter().filter(|&&b| b).count() as u64;
        assert_eq!(ink["pixels"].as_u64().unwrap(), px);
        assert!((ink["coverage"].as_f64().unwrap() - px as f64 / inked as f64).abs() < 1e-12);
        cov += ink["coverage"].as_f64().unwrap();
        let l = arr3(&ink["lab_d50"])[0];
        assert!(l <= last_l, "plates in print order, lightest first");
        last_l = l;
        assert!(ink["plate"]
            .as_str()
            .unwrap()
            .starts_with(&format!("harbour-poster.plate-{:02}-", i + 1)));
    }
    assert!((cov - 1.0).abs() < 1e-9);
    // No region of any plate (or of bare substrate) below --min-area.
    for (label, size, _) in regions::regions(&labels, 320, 240) {
        assert!(size >= 20, "a region of label {label} has {size} pixels");
    }
    let files = files_in(dir.path());
    assert!(files.contains(&"harbour-poster.proof.png".to_string()));
    assert!(files.contains(&"harbour-poster.swatches.svg".to_string()));
    let svg = std::fs::read_to_string(dir.path().join("harbour-poster.swatches.svg")).unwrap();
    assert!(svg.starts_with("<svg") && svg.contains(inks[0]["name"].as_str().unwrap()));
    // The proof shows each plate's ink colour where it prints and the substrate elsewhere.
    let proof = image::open(dir.path().join("harbour-poster.proof.png"))
        .unwrap()
        .to_rgba8();
    for (p, px) in proof.pixels().enumerate() {
        let want = match (0..4).find(|&i| plates[i][p]) {
            Some(i) => chromasift::colour::parse_hex(inks[i]["hex"].as_str().unwrap()).unwrap(),
            None => [255, 255, 255],
        };
        assert_eq!([px[0], px[1], px[2]], want);
    }
}

#[test]
fn trapping_spreads_only_lighter_inks_and_only_near_boundaries() {
    let a = tempfile::tempdir().unwrap();
    let b = tempfile::tempdir().unwrap();
    let doc0 = run_poster(a.path(), &["-k", "4", "--trap", "0"]);
    let doc2 = run_poster(b.path(), &["-k", "4", "--trap", "2"]);
    let inks = doc0["inks"].as_array().unwrap();
    // The counts before trapping; `pixels_printed` and `coverage_printed` are after it.
    let before = |v: &Value| -> Vec<Value> {
        v["inks"]
            .as_array()
            .unwrap()
            .iter()
            .map(|i| {
                let mut i = i.clone();
                let o = i.as_object_mut().unwrap();
                o.remove("pixels_printed");
                o.remove("coverage_printed");
                i
            })
            .collect()
    };
    assert_eq!(
        before(&doc0),
        before(&doc2),
        "trapping changes plates, not the choice or counts"
    );
    let p0: Vec<Vec<bool>> = inks
        .iter()
        .map(|i| read_plate(&a.path().join(i["plate"].as_str().unwrap())))
        .collect();
    let p2: Vec<Vec<bool>> = inks
        .iter()
        .map(|i| read_plate(&b.path().join(i["plate"].as_str().unwrap())))
        .collect();
    let (w, h) = (320i64, 240i64);
    let owner = |p: usize| (0..inks.len()).find(|&i| p0[i][p]);
    let mut added_total = 0;
    for i in 0..inks.len() {
        let li = arr3(&inks[i]["lab_d50"])[0];
        for p in 0..p0[i].len() {
            assert!(!p0[i][p] || p2[i][p], "trapping never removes ink");
            if p2[i][p] && !p0[i][p] {
                added_total += 1;
                // Added only onto a darker ink ...
                let o = owner(p).expect("spread lands on another ink");
                assert!(
                    arr3(&inks[o]["lab_d50"])[0] < li,
                    "ink {i} spread onto lighter ink {o}"
                );
                // ... within 2 pixels of this ink's own region.
                let (x, y) = (p as i64 % w, p as i64 / w);
                let near = (-2..=2i64).any(|dy| {
                    (-2..=2i64).any(|dx| {
                        let (xx, yy) = (x + dx, y + dy);
                        dx * dx + dy * dy <= 4
                            && xx >= 0
                            && yy >= 0
                            && xx < w
                            && yy < h
                            && p0[i][(yy * w + xx) as usize]
                    })
                });
                assert!(
                    near,
                    "pixel {p} added to plate {i} is more than 2 px from it"
                );
            }
        }
    }
    assert!(added_total > 0, "some trapping happened");
}

#[test]
fn resolution_gives_areas_in_square_centimetres() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("card.png");
    // 100 × 50 pixels at 254 dpi (10 000 pixels per metre in pHYs): 0.01 cm per pixel.
    let mut png_bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut png_bytes, 100, 50);
        enc.set_color(png::ColorType::Rgb);
        enc.set_pixel_dims(Some(png::PixelDimensions {
            xppu: 10_000,
            yppu: 10_000,
            unit: png::Unit::Meter,
        }));
        let mut wr = enc.write_header().unwrap();
        let px: Vec<u8> = (0..5000)
            .flat_map(|i| {
                if i % 100 < 50 {
                    [200, 30, 30]
                } else {
                    [20, 20, 20]
                }
            })
            .collect();
        wr.write_image_data(&px).unwrap();
    }
    std::fs::write(&input, &png_bytes).unwrap();
    let inks = fixture("demo/quayside-inks.csv");
    let out = dir.path().join("out");
    let o = separate(&[
        input.to_str().unwrap(),
        "--inks",
        inks.to_str().unwrap(),
        "-k",
        "2",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&out.join("card.separation.json"));
    assert!((doc["dpi"].as_f64().unwrap() - 254.0).abs() < 1e-9);
    for ink in doc["inks"].as_array().unwrap() {
        let px = ink["pixels"].as_f64().unwrap();
        assert!((ink["area_cm2"].as_f64().unwrap() - px * 1e-4).abs() < 1e-9);
    }
    // --dpi overrides the file.
    let out2 = dir.path().join("out2");
    let o = separate(&[
        input.to_str().unwrap(),
        "--inks",
        inks.to_str().unwrap(),
        "-k",
        "2",
        "--dpi",
        "127",
        "-o",
        out2.to_str().unwrap(),
    ]);
    assert!(o.status.success());
    let doc = json(&out2.join("card.separation.json"));
    let ink = &doc["inks"][0];
    assert!(
        (ink["area_cm2"].as_f64().unwrap() - ink["pixels"].as_f64().unwrap() * 4e-4).abs() < 1e-9
    );
}

#[test]
fn forced_inks_json_library_all_and_transparency() {
    let dir = tempfile::tempdir().unwrap();
    let lib = dir.path().join("inks.json");
    std::fs::write(
        &lib,
        r##"[{"name": "Coal", "L": 15, "a": 0, "b": 0}, {"name": "Signal Red", "hex": "#d02020"}, {"name": "Lime", "L": 85, "a": -40, "b": 60}]"##,
    )
    .unwrap();
    let input = dir.path().join("sign.png");
    let px: Vec<u8> = (0..400u32)
        .flat_map(|i| {
            if i < 20 {
                [0, 0, 0, 0]
            } else if i % 20 < 10 {
                [200, 30, 30, 255]
            } else {
                [20, 20, 20, 255]
            }
        })
        .collect();
    write_rgba(&input, 20, 20, &px);
    let out = dir.path().join("out");
    let o = separate(&[
        input.to_str().unwrap(),
        "--inks",
        lib.to_str().unwrap(),
        "-k",
        "2",
        "--use",
        "lime",
        "--min-area",
        "1",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&out.join("sign.separation.json"));
    let names: Vec<&str> = doc["inks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["name"].as_str().unwrap())
        .collect();
    assert!(names.contains(&"Lime"), "{names:?}");
    let total: u64 = doc["inks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["pixels"].as_u64().unwrap())
        .sum();
    assert_eq!(total, 380, "transparent pixels get no ink");
    let out2 = dir.path().join("all");
    let o = separate(&[
        input.to_str().unwrap(),
        "--inks",
        lib.to_str().unwrap(),
        "--all",
        "-o",
        out2.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(
        json(&out2.join("sign.separation.json"))["inks"]
            .as_array()
            .unwrap()
            .len(),
        3
    );
}

fn refused(lib_text: &str, extra: &[&str], expect: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let lib = dir.path().join("shop-inks.csv");
    std::fs::write(&lib, lib_text).unwrap();
    let input = dir.path().join("art.png");
    write_rgb(&input, 4, 4, &[120u8, 40, 40].repeat(16));
    let out = dir.path().join("out");
    let mut args = vec![
        input.to_str().unwrap(),
        "--inks",
        lib.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = separate(&args);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert!(!err.contains("panicked"));
    for e in expect {
        assert!(err.contains(e), "expected '{e}' in {err}");
    }
    assert!(!out.exists(), "nothing written");
}

const GOOD: &str = "name,L,a,b\nNight Black,14,0,0\nHarbour Blue,32,2,-38\nSun Yellow,88,-2,72\n";

#[test]
fn unknown_ink_in_use() {
    refused(
        GOOD,
        &["--use", "Night Black,Rose Pink", "-k", "2"],
        &["shop-inks.csv", "no ink named 'Rose Pink'"],
    );
}

#[test]
fn k_larger_than_the_library() {
    refused(
        GOOD,
        &["-k", "5"],
        &["shop-inks.csv", "k must be at most 3 (got 5)"],
    );
}

#[test]
fn duplicate_ink_names() {
    refused(
        "name,L,a,b\nBlue,30,0,-30\nRed,50,60,40\nblue,31,0,-30\n",
        &["-k", "2"],
        &["shop-inks.csv", "line 4", "duplicate ink name"],
    );
}

#[test]
fn lightness_out_of_range() {
    refused(
        "name,L,a,b\nBlue,30,0,-30\nGlow,104,0,0\n",
        &["-k", "1"],
        &["shop-inks.csv", "line 3", "field 'L'", "outside 0..100"],
    );
}

#[test]
fn empty_library() {
    refused("name,L,a,b\n", &["-k", "1"], &["shop-inks.csv", "no inks"]);
    refused("", &["-k", "1"], &["shop-inks.csv", "no inks"]);
}

#[test]
fn malformed_row() {
    refused(
        "name,L,a,b\nBlue,30,0,-30\nRed,fifty,60,40\n",
        &["-k", "1"],
        &[
            "shop-inks.csv",
            "line 3",
            "field 'L'",
            "'fifty' is not a number",
        ],
    );
    refused(
        "name,L,a,b\nBlue,30,0\n",
        &["-k", "1"],
        &["shop-inks.csv", "line 2", "expected 4 fields"],
    );
}

#[test]
fn more_forced_inks_than_k() {
    refused(
        GOOD,
        &["--use", "Night Black,Sun Yellow", "-k", "1"],
        &["shop-inks.csv", "--use names 2 inks"],
    );
}

#[test]
fn missing_library() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("art.png");
    write_rgb(&input, 2, 2, &[1u8; 12]);
    let out = dir.path().join("out");
    let o = separate(&[
        input.to_str().unwrap(),
        "--inks",
        "nowhere.csv",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("nowhere.csv"));
    assert!(!out.exists());
}
