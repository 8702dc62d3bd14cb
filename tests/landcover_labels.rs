//! `landcover-label`: a label file applied to the classes of the invented river valley
//! (checked against the scene's known surfaces), and a minimum mapping unit on a hand-made
//! class raster whose specks and expected result are known (patches checked with a flood
//! fill written here, independent of the library's labelling).

#[path = "support/cog.rs"]
mod cog;
mod common;
#[path = "support/valley.rs"]
mod valley;

use common::{run, stderr};
use serde_json::Value;
use std::path::Path;
use tiff::encoder::{colortype, TiffEncoder};
use tiff::tags::Tag;
use valley::{read_u8_tiff, river_valley, write_scene_u16, GEOKEYS};

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn json(p: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(p).unwrap()).unwrap()
}

const NAMES: [&str; 5] = ["water", "woodland", "crops", "bare soil", "built-up"];

#[test]
fn labels_name_and_merge_the_classes_of_the_valley() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (w, h) = (160u32, 120u32);
    let (truth, data) = river_valley(w, h);
    let scene = d.join("valley.tif");
    write_scene_u16(&scene, w, h, &data, 10.0, &GEOKEYS, Some("0"));
    let out = d.join("classes");
    let o = run(
        &[
            "landcover",
            s(&scene),
            "-k",
            "5",
            "--index",
            "ndvi:3,4",
            "-o",
            s(&out),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let classes_tif = out.join("valley.classes.tif");
    let (_, _, classes) = read_u8_tiff(&classes_tif);
    // The analyst's labels: each class named after the surface most of its pixels are
    // (the truth of the invented scene), woodland and crops merged into "vegetation".
    let mut csv = String::from("class,label,colour\n");
    let mut expect_label = [""; 6];
    for c in 1..=5u8 {
        let mut n = [0usize; 6];
        for p in 0..classes.len() {
            if classes[p] == c {
                n[truth[p] as usize] += 1;
            }
        }
        let t = (1..=5).max_by_key(|&t| n[t]).unwrap();
        let name = match NAMES[t - 1] {
            "woodland" | "crops" => "vegetation",
            other => other,
        };
        let colour = if name == "water" { "#2a6fb0" } else { "" };
        csv.push_str(&format!("{c},{name},{colour}\n"));
        expect_label[c as usize] = name;
    }
    let labels = d.join("valley-labels.csv");
    std::fs::write(&labels, &csv).unwrap();
    let map = d.join("map");
    let o = run(
        &[
            "landcover-label",
            s(&classes_tif),
            "--labels",
            s(&labels),
            "-o",
            s(&map),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let (_, _, labelled) = read_u8_tiff(&map.join("valley.labelled.tif"));
    let doc = json(&map.join("valley.labels.json"));
    let list = doc["labels"].as_array().unwrap();
    assert_eq!(list.len(), 4, "five classes, two merged: {csv}");
    let number_of = |name: &str| {
        list.iter().find(|l| l["name"] == name).unwrap()["number"]
            .as_u64()
            .unwrap() as u8
    };
    // Every pixel carries its class's label; nodata stays 0.
    for p in 0..classes.len() {
        let want = if classes[p] == 0 {
            0
        } else {
            number_of(expect_label[classes[p] as usize])
        };
        assert_eq!(labelled[p], want, "pixel {p}");
    }
    // Against the scene's surfaces: ≥ 95 % of valid pixels carry their surface's label.
    let surface_label = |t: u8| match NAMES[t as usize - 1] {
        "woodland" | "crops" => "vegetation",
        other => other,
    };
    let (mut hit, mut valid) = (0, 0);
    for p in 0..truth.len() {
        if truth[p] != 0 {
            valid += 1;
            hit += (labelled[p] == number_of(surface_label(truth[p]))) as usize;
        }
    }
    assert!(hit as f64 >= 0.95 * valid as f64, "{hit} of {valid}");
    // Field points named as the analyst names the surfaces: `--match same` scores the
    // labelled map by its labels' names (read from valley.labels.json beside it), and the
    // unlabelled class raster, whose numbers no name equals, with a warning.
    let mut points = String::from("x,y,label\n");
    for p in (0..truth.len()).step_by(7).filter(|&p| truth[p] != 0) {
        let (col, row) = ((p % w as usize) as f64, (p / w as usize) as f64);
        points.push_str(&format!(
            "{},{},{}\n",
            500_000.0 + (col + 0.5) * 10.0,
            5_000_000.0 - (row + 0.5) * 10.0,
            surface_label(truth[p])
        ));
    }
    let points_csv = d.join("field.csv");
    std::fs::write(&points_csv, points).unwrap();
    let assess = |raster: &Path, out: &Path| -> Value {
        let o = run(
            &[
                "landcover-assess",
                s(raster),
                "--points",
                s(&points_csv),
                "--match",
                "same",
                "-o",
                s(out),
            ],
            &[],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        let name = raster.file_name().unwrap().to_str().unwrap();
        let stem = name.trim_end_matches(".tif").trim_end_matches(".classes");
        json(&out.join(format!("{stem}.assessment.json")))
    };
    let named = assess(&map.join("valley.labelled.tif"), &d.join("check-named"));
    assert_eq!(named["map_label_names"], "valley.labels.json");
    let oa = named["overall_accuracy"].as_f64().unwrap();
    assert!(oa >= 0.9, "{oa}");
    assert!(named.get("warnings").is_none(), "{named}");
    let numbers = assess(&classes_tif, &d.join("check-numbers"));
    assert_eq!(numbers["overall_accuracy"].as_f64().unwrap(), 0.0);
    assert!(numbers["warnings"][0]
        .as_str()
        .unwrap()
        .contains("no map label"));
    // Counts and ground areas per label; the file's colour is kept. A 10 m pixel of UTM
    // covers 100 / k² m² of ground, k the projection's scale: k0 = 0.9996 on the central
    // meridian, where the valley lies (it reaches 1.6 km east of it, where k is larger by
    // x² / 2R² < 4e-8; Snyder 1987, "Map Projections: A Working Manual", USGS PP 1395, §8).
    let ground = 100.0 / (0.9996f64 * 0.9996);
    for l in list {
        let n = labelled
            .iter()
            .filter(|&&v| v as u64 == l["number"].as_u64().unwrap())
            .count();
        assert_eq!(l["pixels"].as_u64().unwrap(), n as u64);
        let area = l["area_m2"].as_f64().unwrap();
        assert!(
            (area - n as f64 * ground).abs() <= 1e-6 * area,
            "{area} for {n} pixels"
        );
    }
    assert_eq!(doc["area_method"], "ellipsoid-geodesic-lattice");
    let water = list.iter().find(|l| l["name"] == "water").unwrap();
    assert_eq!(water["colour"], "#2a6fb0");
    // The raster's colour table (TIFF 6.0 ColorMap, 320: all reds, greens, blues, 16-bit)
    // holds the water colour at the water label's number.
    let mut dec =
        tiff::decoder::Decoder::new(std::fs::File::open(map.join("valley.labelled.tif")).unwrap())
            .unwrap();
    let cmap = dec.get_tag_u16_vec(Tag::ColorMap).unwrap();
    let n = water["number"].as_u64().unwrap() as usize;
    assert_eq!(
        [cmap[n] / 257, cmap[256 + n] / 257, cmap[512 + n] / 257],
        [0x2a, 0x6f, 0xb0]
    );
    // The labelled raster keeps the class raster's georeferencing.
    let a = chromasift::geotiff::read_geotags(&classes_tif).unwrap();
    let b = chromasift::geotiff::read_geotags(&map.join("valley.labelled.tif")).unwrap();
    assert_eq!(a, b);
    // Tiled like the class raster: one 256-pixel tile at 160 × 120, Deflate, predictor 2.
    let tiled = cog::images(&map.join("valley.labelled.tif"));
    cog::check_cog_layout(&tiled, w, h, 256, false);
    assert_eq!((tiled[0].compression, tiled[0].predictor), (8, 2));
    assert!(map.join("valley.labelled.png").exists() && map.join("valley.labels.csv").exists());
    // A class the file does not name is refused, naming both files.
    let short = d.join("short.csv");
    std::fs::write(&short, "class,label\n1,water\n").unwrap();
    let o = run(
        &[
            "landcover-label",
            s(&classes_tif),
            "--labels",
            s(&short),
            "-o",
            s(&d.join("x")),
        ],
        &[],
    );
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        e.contains("valley.classes.tif") && e.contains("short.csv"),
        "{e}"
    );
    assert!(!d.join("x").exists() || common::files_in(&d.join("x")).is_empty());
}

/// 8-connected patches of equal non-zero values: (value, size) of each.
fn patches(v: &[u8], w: usize, h: usize) -> Vec<(u8, usize)> {
    let mut seen = vec![false; v.len()];
    let mut out = Vec::new();
    for start in 0..v.len() {
        if seen[start] || v[start] == 0 {
            continue;
        }
        let mut stack = vec![start];
        seen[start] = true;
        let mut size = 0;
        while let Some(p) = stack.pop() {
            size += 1;
            let (x, y) = ((p % w) as i64, (p / w) as i64);
            for dy in -1..=1 {
                for dx in -1..=1 {
                    let (xx, yy) = (x + dx, y + dy);
                    if xx < 0 || yy < 0 || xx >= w as i64 || yy >= h as i64 {
                        continue;
                    }
                    let q = (yy * w as i64 + xx) as usize;
                    if !seen[q] && v[q] == v[start] {
                        seen[q] = true;
                        stack.push(q);
                    }
                }
            }
        }
        out.push((v[start], size));
    }
    out
}

#[test]
fn minimum_mapping_unit_merges_specks_into_their_surroundings() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (40usize, 30usize);
    // Left half class 1, right half class 2, a nodata strip on top.
    let mut v: Vec<u8> = (0..w * h).map(|p| if p % w < 20 { 1 } else { 2 }).collect();
    v[..w].iter_mut().for_each(|x| *x = 0);
    let mut expected = v.clone();
    // Specks of class 3 inside class 1 (1, 2 and 4 pixels): below 5 pixels, they go.
    for &p in &[
        5 * w + 5,
        10 * w + 8,
        10 * w + 9,
        20 * w + 3,
        20 * w + 4,
        21 * w + 3,
        21 * w + 4,
    ] {
        v[p] = 3;
    }
    // A 6-pixel patch of class 3 inside class 2: kept.
    for &p in &[
        8 * w + 30,
        8 * w + 31,
        8 * w + 32,
        9 * w + 30,
        9 * w + 31,
        9 * w + 32,
    ] {
        v[p] = 3;
        expected[p] = 3;
    }
    // A 2-pixel speck of class 2 inside class 1 next to nothing else: goes to class 1.
    v[25 * w + 10] = 2;
    v[25 * w + 11] = 2;
    let classes = dir.path().join("specks.classes.tif");
    {
        let mut enc = TiffEncoder::new(std::fs::File::create(&classes).unwrap()).unwrap();
        let mut img = enc
            .new_image::<colortype::Gray8>(w as u32, h as u32)
            .unwrap();
        img.encoder()
            .write_tag(Tag::Unknown(33550), &[10.0f64, 10.0, 0.0][..])
            .unwrap();
        img.encoder()
            .write_tag(
                Tag::Unknown(33922),
                &[0.0f64, 0.0, 0.0, 500_000.0, 5_000_000.0, 0.0][..],
            )
            .unwrap();
        img.encoder()
            .write_tag(Tag::Unknown(34735), &GEOKEYS[..])
            .unwrap();
        img.write_data(&v).unwrap();
    }
    let out = dir.path().join("map");
    // 0.05 ha = 500 m² = 5 pixels of 10 m × 10 m.
    let o = run(
        &[
            "landcover-label",
            s(&classes),
            "--min-unit",
            "0.05ha",
            "-o",
            s(&out),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let (_, _, got) = read_u8_tiff(&out.join("specks.labelled.tif"));
    assert_eq!(got, expected);
    let small: Vec<_> = patches(&got, w, h)
        .into_iter()
        .filter(|&(_, n)| n < 5)
        .collect();
    assert!(small.is_empty(), "patches below the unit remain: {small:?}");
    let doc = json(&out.join("specks.labels.json"));
    assert_eq!(doc["min_unit_pixels"], 5);
    assert_eq!(doc["patches_merged"], 4);
    assert_eq!(doc["pixels_changed"], 9);
    let by = |n: u64| {
        doc["labels"]
            .as_array()
            .unwrap()
            .iter()
            .find(|l| l["number"] == n)
            .unwrap()
            .clone()
    };
    assert_eq!(by(3)["pixels_labelled"], 13);
    assert_eq!(by(3)["pixels"], 6);
    // In pixels, the same; without a projected CRS, m² and ha are refused.
    let out2 = dir.path().join("map2");
    let o = run(
        &[
            "landcover-label",
            s(&classes),
            "--min-unit",
            "5px",
            "-o",
            s(&out2),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(read_u8_tiff(&out2.join("specks.labelled.tif")).2, expected);
    let plain = dir.path().join("plain.classes.tif");
    {
        let mut enc = TiffEncoder::new(std::fs::File::create(&plain).unwrap()).unwrap();
        enc.write_image::<colortype::Gray8>(w as u32, h as u32, &v)
            .unwrap();
    }
    let o = run(
        &[
            "landcover-label",
            s(&plain),
            "--min-unit",
            "0.05ha",
            "-o",
            s(&out2),
        ],
        &[],
    );
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        e.contains("plain.classes.tif") && e.contains("ground area"),
        "{e}"
    );
    // A unit larger than the whole map is refused; a label naming a class the map does
    // not hold, and a label the unit empties, are warned of.
    let too_big = dir.path().join("too-big");
    let o = run(
        &[
            "landcover-label",
            s(&classes),
            "--min-unit",
            "100ha",
            "-o",
            s(&too_big),
        ],
        &[],
    );
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        e.contains("--min-unit") && e.contains("mapped pixels"),
        "{e}"
    );
    assert!(!too_big.exists());
    let file = dir.path().join("labels.csv");
    std::fs::write(&file, "class,label\n1,field\n2,speck\n3,wood\n9,ghost\n").unwrap();
    let warned = dir.path().join("warned");
    let o = run(
        &[
            "landcover-label",
            s(&classes),
            "--labels",
            s(&file),
            "--min-unit",
            "0.05ha",
            "-o",
            s(&warned),
        ],
        &[],
    );
    let e = stderr(&o);
    assert!(o.status.success(), "{e}");
    assert!(
        e.contains("warning") && e.contains("'ghost'") && e.contains("9"),
        "{e}"
    );
    let doc = json(&warned.join("specks.labels.json"));
    let warnings: Vec<&str> = doc["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap())
        .collect();
    assert!(
        warnings.iter().any(|w| w.contains("'ghost'")),
        "{warnings:?}"
    );
}
