//! Land-cover models that travel: `landcover-sample`, `landcover-fit` and
//! `landcover --model` on tiles of the invented river valley (truth known per pixel).
//! Checks: one model gives the same class numbers on both sides of a tile seam and
//! recovers the surfaces (adjusted Rand index, Hubert & Arabie 1985); samples fitted
//! separately give the same model bytes as one fit on the rasters; mismatched rasters,
//! models and samples are refused in one line.

mod common;
#[path = "support/valley.rs"]
mod valley;

use common::{run, stderr};
use std::path::{Path, PathBuf};
use valley::{
    adjusted_rand, read_f32_tiff, read_u8_tiff, river_valley, write_scene_u16_at,
    write_scene_u16_with, GEOKEYS,
};

const W: u32 = 160;
const H: u32 = 120;
const PIXEL_M: f64 = 10.0;

/// Columns x0..x1 of a 4-band scene of width `w`.
fn crop(data: &[u16], w: u32, x0: u32, x1: u32) -> Vec<u16> {
    let h = data.len() / (w as usize * 4);
    let mut out = Vec::with_capacity(h * (x1 - x0) as usize * 4);
    for y in 0..h {
        let row = y * w as usize * 4;
        out.extend_from_slice(&data[row + x0 as usize * 4..row + x1 as usize * 4]);
    }
    out
}

/// The valley and its truth, plus tiles split at the columns `cuts` (written as GeoTIFFs
/// whose origins follow the mosaic's, named t1.tif, t2.tif, ...).
fn tiles(dir: &Path, cuts: &[u32]) -> (Vec<u8>, PathBuf, Vec<PathBuf>) {
    let (truth, data) = river_valley(W, H);
    let whole = dir.join("valley.tif");
    let origin = (500_000.0, 5_000_000.0);
    write_scene_u16_at(&whole, W, H, &data, PIXEL_M, origin, &GEOKEYS, Some("0"));
    let mut edges = vec![0];
    edges.extend_from_slice(cuts);
    edges.push(W);
    let mut paths = Vec::new();
    for (i, pair) in edges.windows(2).enumerate() {
        let p = dir.join(format!("t{}.tif", i + 1));
        let part = crop(&data, W, pair[0], pair[1]);
        let o = (origin.0 + pair[0] as f64 * PIXEL_M, origin.1);
        write_scene_u16_at(
            &p,
            pair[1] - pair[0],
            H,
            &part,
            PIXEL_M,
            o,
            &GEOKEYS,
            Some("0"),
        );
        paths.push(p);
    }
    (truth, whole, paths)
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn ok(args: &[&str], env: &[(&str, &str)]) {
    let o = run(args, env);
    assert!(o.status.success(), "{args:?}: {}", stderr(&o));
}

/// Exit 2 with one line on standard error containing each of `words`.
fn refused(args: &[&str], words: &[&str]) -> String {
    let o = run(args, &[]);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?} should be refused: {e}");
    assert_eq!(e.trim_end().lines().count(), 1, "one line: {e}");
    assert!(!e.contains("panicked"), "{e}");
    for w in words {
        assert!(e.contains(w), "message should name {w:?}: {e}");
    }
    e
}

#[test]
fn one_model_gives_the_same_class_numbers_on_both_sides_of_a_seam() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let seam = 80u32;
    let (truth, whole, t) = tiles(d, &[seam]);
    let model = d.join("valley.model.json");
    ok(
        &[
            "landcover-fit",
            s(&t[0]),
            s(&t[1]),
            "-k",
            "5",
            "--index",
            "ndvi:3,4",
            "-o",
            s(&model),
        ],
        &[],
    );
    let out = d.join("out");
    for input in [&t[0], &t[1], &whole] {
        ok(
            &["landcover", s(input), "--model", s(&model), "-o", s(&out)],
            &[],
        );
    }
    let (_, _, left) = read_u8_tiff(&out.join("t1.classes.tif"));
    let (_, _, right) = read_u8_tiff(&out.join("t2.classes.tif"));
    let (_, _, all) = read_u8_tiff(&out.join("valley.classes.tif"));
    let (wl, wr) = (seam as usize, (W - seam) as usize);
    // The tiles put together are the mosaic under the same model, pixel for pixel.
    let mut joined = Vec::with_capacity(all.len());
    for y in 0..H as usize {
        joined.extend_from_slice(&left[y * wl..(y + 1) * wl]);
        joined.extend_from_slice(&right[y * wr..(y + 1) * wr]);
    }
    assert_eq!(joined, all, "tiles and mosaic disagree");
    // Along the seam: where the surface runs across it (3 × 3 pure on both sides), the
    // class number is the same on both tiles.
    let pure = |x: i64, y: i64| {
        let t0 = truth[(y * W as i64 + x) as usize];
        t0 != 0
            && (-1..=1).all(|dy| {
                (-1..=1).all(|dx| {
                    let (xx, yy) = (x + dx, y + dy);
                    yy < 0 || yy >= H as i64 || truth[(yy * W as i64 + xx) as usize] == t0
                })
            })
    };
    let mut across = 0;
    for y in 0..H as i64 {
        let (a, b) = (seam as i64 - 1, seam as i64);
        let (ta, tb) = (
            truth[(y * W as i64 + a) as usize],
            truth[(y * W as i64 + b) as usize],
        );
        if ta == tb && pure(a, y) && pure(b, y) {
            across += 1;
            let ca = left[y as usize * wl + wl - 1];
            let cb = right[y as usize * wr];
            assert_eq!(
                ca, cb,
                "row {y}: class {ca} left of the seam, {cb} right of it"
            );
        }
    }
    assert!(
        across >= 60,
        "the seam crosses surfaces on {across} rows only"
    );
    // Each surface present in both tiles has one class number in both (majority).
    let majority = |classes: &[u8], width: usize, x0: usize, surface: u8| {
        let mut n = [0usize; 256];
        for y in 0..H as usize {
            for x in 0..width {
                if truth[y * W as usize + x0 + x] == surface {
                    n[classes[y * width + x] as usize] += 1;
                }
            }
        }
        let total: usize = n.iter().sum();
        (total, (0..256).max_by_key(|&c| n[c]).unwrap())
    };
    let mut shared = 0;
    for surface in 1..=5u8 {
        let (nl, cl) = majority(&left, wl, 0, surface);
        let (nr, cr) = majority(&right, wr, wl, surface);
        if nl >= 50 && nr >= 50 {
            shared += 1;
            assert_eq!(
                cl, cr,
                "surface {surface}: class {cl} in tile 1, {cr} in tile 2"
            );
        }
    }
    assert!(shared >= 2, "only {shared} surfaces span both tiles");
    // The model recovers the surfaces on the tiles put together (ARI ≥ 0.95, as the
    // single-scene test asks).
    let (mut tv, mut cv) = (Vec::new(), Vec::new());
    for p in 0..all.len() {
        if truth[p] != 0 {
            tv.push(truth[p]);
            cv.push(joined[p]);
        }
    }
    let ari = adjusted_rand(&tv, &cv);
    assert!(ari >= 0.95, "adjusted Rand index {ari}");
    let doc: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("t2.classes.json")).unwrap()).unwrap();
    assert_eq!(doc["model"], "valley.model.json");
}

#[test]
fn samples_fitted_together_equal_one_fit_on_the_rasters() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (_, whole, t) = tiles(d, &[53, 106]);
    let scene = ["--index", "ndvi:3,4", "--sample", "1500"];
    let mut samples = Vec::new();
    for (i, tile) in t.iter().enumerate() {
        let out = d.join(format!("t{}.sample", i + 1));
        let threads = if i % 2 == 0 { "1" } else { "2" };
        let mut a = vec!["landcover-sample", s(tile), "--seed", "7", "-o", s(&out)];
        a.extend_from_slice(&scene);
        ok(&a, &[("RAYON_NUM_THREADS", threads)]);
        samples.push(out);
    }
    // (a) + (b): the samples, listed in a file; (d): the rasters on the command line.
    let list = d.join("samples.txt");
    let text: String = samples.iter().map(|p| format!("{}\n", s(p))).collect();
    std::fs::write(&list, format!("# tiles, west to east\n{text}\n")).unwrap();
    for fit_rows in ["2000000", "2000"] {
        let from_samples = d.join(format!("a-{fit_rows}.json"));
        let from_rasters = d.join(format!("d-{fit_rows}.json"));
        let fit = ["-k", "5", "--seed", "7", "--fit-rows", fit_rows];
        let mut a = vec!["landcover-fit", "--list", s(&list), "-o", s(&from_samples)];
        a.extend_from_slice(&fit);
        ok(&a, &[("RAYON_NUM_THREADS", "1")]);
        let mut b = vec![
            "landcover-fit",
            s(&t[0]),
            s(&t[1]),
            s(&t[2]),
            "-o",
            s(&from_rasters),
        ];
        b.extend_from_slice(&fit);
        b.extend_from_slice(&scene);
        ok(&b, &[("RAYON_NUM_THREADS", "2")]);
        let (ma, mb) = (
            std::fs::read(&from_samples).unwrap(),
            std::fs::read(&from_rasters).unwrap(),
        );
        assert!(ma == mb, "model files differ for --fit-rows {fit_rows}");
        let m: serde_json::Value = serde_json::from_slice(&ma).unwrap();
        let rows: u64 = m["sources"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["sample_rows"].as_u64().unwrap())
            .sum();
        let want = rows.min(fit_rows.parse().unwrap());
        assert_eq!(m["fit_rows"].as_u64().unwrap(), want);
        assert_eq!(m["format_version"], 1);
        assert_eq!(
            m["features"],
            serde_json::json!(["1", "2", "3", "4", "ndvi:3,4"])
        );
    }
    // A sample drawn with another seed is refused by the fit.
    refused(
        &[
            "landcover-fit",
            s(&samples[0]),
            "-k",
            "5",
            "--seed",
            "8",
            "-o",
            s(&d.join("x.json")),
        ],
        &["t1.sample", "seed 7", "seed 8"],
    );
    // A damaged sample file is refused, naming it.
    let mut bytes = std::fs::read(&samples[1]).unwrap();
    let mid = bytes.len() / 2;
    bytes[mid] ^= 0x40;
    let broken = d.join("broken.sample");
    std::fs::write(&broken, bytes).unwrap();
    refused(
        &[
            "landcover-fit",
            s(&broken),
            "-k",
            "5",
            "--seed",
            "7",
            "-o",
            s(&d.join("y.json")),
        ],
        &["broken.sample", "checksum"],
    );
    assert!(!d.join("x.json").exists() && !d.join("y.json").exists());

    // One scene: the model `landcover --save-model` writes is the one `landcover-fit`
    // writes, and applying it gives the fitted run's rasters byte for byte.
    let saved = d.join("saved.model.json");
    let fitted_dir = d.join("fitted");
    ok(
        &[
            "landcover",
            s(&whole),
            "-k",
            "5",
            "--save-model",
            s(&saved),
            "-o",
            s(&fitted_dir),
        ],
        &[],
    );
    let fitted = d.join("fit.model.json");
    ok(
        &["landcover-fit", s(&whole), "-k", "5", "-o", s(&fitted)],
        &[],
    );
    assert!(std::fs::read(&saved).unwrap() == std::fs::read(&fitted).unwrap());
    let applied_dir = d.join("applied");
    ok(
        &[
            "landcover",
            s(&whole),
            "--model",
            s(&saved),
            "-o",
            s(&applied_dir),
        ],
        &[],
    );
    for f in [
        "valley.classes.tif",
        "valley.uncertainty.tif",
        "valley.classes.png",
    ] {
        let (a, b) = (fitted_dir.join(f), applied_dir.join(f));
        assert!(
            std::fs::read(&a).unwrap() == std::fs::read(&b).unwrap(),
            "{f} differs"
        );
    }
    let unc = read_f32_tiff(&applied_dir.join("valley.uncertainty.tif"));
    assert_eq!(unc.len(), (W * H) as usize);
}

#[test]
fn rasters_and_flags_that_do_not_match_the_model_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (_, whole, _) = tiles(d, &[]);
    let model = d.join("m.model.json");
    ok(
        &["landcover-fit", s(&whole), "-k", "4", "-o", s(&model)],
        &[],
    );
    let out = d.join("out");
    // Three bands instead of four.
    let rgb = d.join("rgb.tif");
    {
        use tiff::encoder::{colortype, TiffEncoder};
        let mut enc = TiffEncoder::new(std::fs::File::create(&rgb).unwrap()).unwrap();
        enc.write_image::<colortype::RGB16>(8, 8, &vec![1000u16; 8 * 8 * 3])
            .unwrap();
    }
    refused(
        &["landcover", s(&rgb), "--model", s(&model), "-o", s(&out)],
        &["rgb.tif", "3 bands", "4"],
    );
    // Four bands, but 32-bit float (another scale of values).
    let float = d.join("float.tif");
    {
        use tiff::encoder::{colortype, TiffEncoder};
        let mut enc = TiffEncoder::new(std::fs::File::create(&float).unwrap()).unwrap();
        enc.write_image::<colortype::RGBA32Float>(8, 8, &vec![0.1f32; 8 * 8 * 4])
            .unwrap();
    }
    refused(
        &["landcover", s(&float), "--model", s(&model), "-o", s(&out)],
        &["float.tif", "f32", "u16"],
    );
    // The model fixes K, the features and the engine.
    for extra in [
        ["-k", "6"],
        ["--bands", "1,2"],
        ["--seed", "3"],
        ["--mode", "soft"],
    ] {
        let mut a = vec!["landcover", s(&whole), "--model", s(&model), "-o", s(&out)];
        a.extend_from_slice(&extra);
        refused(&a, &[extra[0]]);
    }
    // Not a model: a sample file, JSON of another kind, another format version.
    let other = d.join("other.json");
    std::fs::write(&other, "{\"colors\": []}\n").unwrap();
    refused(
        &["landcover", s(&whole), "--model", s(&other), "-o", s(&out)],
        &["other.json", "format"],
    );
    let text = std::fs::read_to_string(&model).unwrap();
    let newer = d.join("newer.json");
    std::fs::write(
        &newer,
        text.replace("\"format_version\": 1", "\"format_version\": 9"),
    )
    .unwrap();
    refused(
        &["landcover", s(&whole), "--model", s(&newer), "-o", s(&out)],
        &["newer.json", "version 9"],
    );
    assert!(
        common::files_in(&out).is_empty(),
        "{:?}",
        common::files_in(&out)
    );
}

/// GDAL_METADATA as GDAL writes it (the form of `fixtures/rasters/gdal/scale_offset.tif`):
/// every band's stored numbers times 0.0001 are reflectances.
const REFLECTANCE_SCALE: &str = r#"<GDALMetadata>
  <Item name="SCALE" sample="0" role="scale">0.0001</Item>
  <Item name="SCALE" sample="1" role="scale">0.0001</Item>
  <Item name="SCALE" sample="2" role="scale">0.0001</Item>
  <Item name="SCALE" sample="3" role="scale">0.0001</Item>
</GDALMetadata>"#;

#[test]
fn a_raster_whose_numbers_are_on_another_scale_is_refused_by_the_model() {
    // The same stored numbers, once tagged as reflectance × 10 000 and once untagged: the
    // model fitted on reflectances would put the untagged numbers (10 000 times larger)
    // in whichever class lies farthest out, so it refuses them.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (_, data) = river_valley(W, H);
    let tagged = d.join("tagged.tif");
    let plain = d.join("plain.tif");
    let origin = (500_000.0, 5_000_000.0);
    write_scene_u16_with(
        &tagged,
        W,
        H,
        &data,
        PIXEL_M,
        origin,
        &GEOKEYS,
        Some("0"),
        Some(REFLECTANCE_SCALE),
    );
    write_scene_u16_at(&plain, W, H, &data, PIXEL_M, origin, &GEOKEYS, Some("0"));
    let model = d.join("m.model.json");
    ok(
        &["landcover-fit", s(&tagged), "-k", "4", "-o", s(&model)],
        &[],
    );
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&model).unwrap()).unwrap();
    assert_eq!(m["band_scale_offset"][3], serde_json::json!([0.0001, 0.0]));
    let out = d.join("out");
    refused(
        &["landcover", s(&plain), "--model", s(&model), "-o", s(&out)],
        &["plain.tif", "scale 1 offset 0", "scale 0.0001 offset 0"],
    );
    assert!(!out.exists());
    ok(
        &["landcover", s(&tagged), "--model", s(&model), "-o", s(&out)],
        &[],
    );
    // Samples of differently scaled rasters are not fitted together either.
    let (sa, sb) = (d.join("a.sample"), d.join("b.sample"));
    ok(&["landcover-sample", s(&tagged), "-o", s(&sa)], &[]);
    ok(&["landcover-sample", s(&plain), "-o", s(&sb)], &[]);
    refused(
        &[
            "landcover-fit",
            s(&sa),
            s(&sb),
            "-k",
            "4",
            "-o",
            s(&d.join("ab.json")),
        ],
        &["scale and offset"],
    );
}

#[test]
fn a_cloud_mask_is_applied_with_a_saved_model() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (_, whole, _) = tiles(d, &[]);
    let model = d.join("m.model.json");
    ok(
        &["landcover-fit", s(&whole), "-k", "4", "-o", s(&model)],
        &[],
    );
    // A mask on the scene's grid: 1 over a 20 × 10 block at column 30, row 40.
    let mask = d.join("clouds.tif");
    {
        use tiff::encoder::{colortype, TiffEncoder};
        use tiff::tags::Tag;
        let mut px = vec![0u8; (W * H) as usize];
        for y in 40..50 {
            for x in 30..50 {
                px[(y * W + x) as usize] = 1;
            }
        }
        let mut enc = TiffEncoder::new(std::fs::File::create(&mask).unwrap()).unwrap();
        let mut img = enc.new_image::<colortype::Gray8>(W, H).unwrap();
        img.encoder()
            .write_tag(Tag::Unknown(33550), &[PIXEL_M, PIXEL_M, 0.0][..])
            .unwrap();
        img.encoder()
            .write_tag(
                Tag::Unknown(33922),
                &[0.0, 0.0, 0.0, 500_000.0, 5_000_000.0, 0.0][..],
            )
            .unwrap();
        img.encoder()
            .write_tag(Tag::Unknown(34735), &GEOKEYS[..])
            .unwrap();
        img.write_data(&px).unwrap();
    }
    let (plain, masked) = (d.join("plain"), d.join("masked"));
    ok(
        &[
            "landcover",
            s(&whole),
            "--model",
            s(&model),
            "-o",
            s(&plain),
        ],
        &[],
    );
    ok(
        &[
            "landcover",
            s(&whole),
            "--model",
            s(&model),
            "--exclude",
            s(&mask),
            "-o",
            s(&masked),
        ],
        &[],
    );
    let doc = |dir: &Path| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(dir.join("valley.classes.json")).unwrap())
            .unwrap()
    };
    let (a, b) = (doc(&plain), doc(&masked));
    let (_, _, before) = read_u8_tiff(&plain.join("valley.classes.tif"));
    let (_, _, after) = read_u8_tiff(&masked.join("valley.classes.tif"));
    // The block's pixels that had a class lose it; nothing else changes.
    let mut dropped = 0u64;
    for y in 0..H {
        for x in 0..W {
            let i = (y * W + x) as usize;
            let inside = (40..50).contains(&y) && (30..50).contains(&x);
            if inside {
                assert_eq!(after[i], 0, "masked pixel ({x}, {y}) has a class");
                dropped += u64::from(before[i] != 0);
            } else {
                assert_eq!(after[i], before[i], "pixel ({x}, {y}) changed");
            }
        }
    }
    assert!(dropped > 100, "{dropped}");
    assert_eq!(
        a["valid_pixels"].as_u64().unwrap() - b["valid_pixels"].as_u64().unwrap(),
        dropped
    );
    assert!(b["excluded_by"].as_str().unwrap().ends_with("clouds.tif"));
    assert!(a["excluded_by"].is_null());
}
