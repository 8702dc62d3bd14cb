//! `chromasift landcover` on an invented river-valley scene (recovery, georeferencing,
//! areas, uncertainty), Iris through the generic path against scikit-learn, bad input.

#[path = "support/cog.rs"]
mod cog;
mod common;
#[path = "support/valley.rs"]
mod valley;

use chromasift::geotiff;
use common::{run, stderr};
use serde_json::Value;
use std::path::Path;
use tiff::encoder::{colortype, TiffEncoder};
use valley::{adjusted_rand, read_f32_tiff, read_u8_tiff, river_valley, write_scene_u16, GEOKEYS};

#[test]
fn river_valley_is_recovered_and_stays_on_the_map() {
    let dir = tempfile::tempdir().unwrap();
    let scene = dir.path().join("valley.tif");
    let (w, h) = (160u32, 120u32);
    let (truth, data) = river_valley(w, h);
    write_scene_u16(&scene, w, h, &data, 10.0, &GEOKEYS, Some("0"));
    let out = dir.path().join("classes");
    let o = run(
        &[
            "landcover",
            scene.to_str().unwrap(),
            "-k",
            "5",
            "--index",
            "ndvi:3,4",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("not a validated land-cover classification"));
    let mut files = common::files_in(&out);
    files.sort();
    assert_eq!(
        files,
        [
            "valley.classes.csv",
            "valley.classes.json",
            "valley.classes.png",
            "valley.classes.tif",
            "valley.uncertainty.tif"
        ]
    );

    // Classes recovered: adjusted Rand index ≥ 0.95 on the valid pixels; nodata → 0.
    let (cw, ch, classes) = read_u8_tiff(&out.join("valley.classes.tif"));
    assert_eq!((cw, ch), (w, h));
    let mut t = Vec::new();
    let mut c = Vec::new();
    for p in 0..classes.len() {
        if truth[p] == 0 {
            assert_eq!(classes[p], 0, "nodata pixel {p} is class 0");
        } else {
            assert!((1..=5).contains(&classes[p]));
            t.push(truth[p]);
            c.push(classes[p]);
        }
    }
    let ari = adjusted_rand(&t, &c);
    assert!(ari >= 0.95, "adjusted Rand index {ari}");

    // Georeferencing copied unchanged into both rasters.
    let geo_in = geotiff::read_geotags(&scene).unwrap();
    assert!(!geo_in.is_empty());
    assert_eq!(
        geotiff::read_geotags(&out.join("valley.classes.tif")).unwrap(),
        geo_in
    );
    assert_eq!(
        geotiff::read_geotags(&out.join("valley.uncertainty.tif")).unwrap(),
        geo_in
    );

    // Areas: 10 m UTM pixels on the central meridian, where the UTM scale factor is 0.9996
    // (the UTM definition), cover 100 / 0.9996² m² of ground; 1 ha = 10 000 m².
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("valley.classes.json")).unwrap()).unwrap();
    assert_eq!(doc["area_method"], "ellipsoid-geodesic-lattice");
    let ground = 100.0 / (0.9996f64 * 0.9996);
    assert_eq!(doc["nodata_pixels"].as_u64().unwrap(), 6 * 120);
    let mut total = 0;
    for cl in doc["classes"].as_array().unwrap() {
        let px = cl["pixels"].as_u64().unwrap();
        total += px;
        let area = cl["area_m2"].as_f64().unwrap();
        assert!(
            (area - px as f64 * ground).abs() < 1e-6 * area,
            "{area} m² for {px} px"
        );
        assert!((cl["hectares"].as_f64().unwrap() - area / 10_000.0).abs() < 1e-9 * area);
        let n = classes
            .iter()
            .filter(|&&v| v as u64 == cl["class"].as_u64().unwrap())
            .count() as u64;
        assert_eq!(n, px);
        // Per-band statistics are in input units (reflectance × 10 000) and the NDVI is unitless.
        let bands = cl["bands"].as_array().unwrap();
        assert_eq!(bands.len(), 5);
        assert!(bands[0]["mean"].as_f64().unwrap() > 100.0);
        assert!(bands[4]["mean"].as_f64().unwrap().abs() <= 1.0);
    }
    assert_eq!(total, doc["valid_pixels"].as_u64().unwrap());
    let csv = std::fs::read_to_string(out.join("valley.classes.csv")).unwrap();
    assert!(csv.starts_with("class,pixels,share,area_m2,hectares,mean_uncertainty,mean_1,std_1"));
    assert_eq!(csv.lines().count(), 6);
    assert!(csv
        .lines()
        .next()
        .unwrap()
        .ends_with(",mean_ndvi_3_4,std_ndvi_3_4"));
    assert!(csv.lines().all(|l| l.split(',').count() == 6 + 2 * 5));

    // Uncertainty: higher on class boundaries than inside classes; nodata written as -1.
    let unc = read_f32_tiff(&out.join("valley.uncertainty.tif"));
    let (mut edge, mut ne, mut inner, mut ni) = (0.0, 0.0, 0.0, 0.0);
    for y in 1..h - 1 {
        for x in 7..w - 1 {
            let p = (y * w + x) as usize;
            let boundary = [p - 1, p + 1, p - w as usize, p + w as usize]
                .iter()
                .any(|&q| truth[q] != truth[p]);
            if boundary {
                edge += unc[p] as f64;
                ne += 1.0;
            } else {
                inner += unc[p] as f64;
                ni += 1.0;
            }
        }
    }
    assert!(
        edge / ne > 1.5 * (inner / ni),
        "boundary {} vs interior {}",
        edge / ne,
        inner / ni
    );
    assert!(unc[0] == -1.0 && unc.iter().all(|&v| v == -1.0 || (0.0..=1.0).contains(&v)));

    // The preview is a PNG at least as large as the scene, with the legend below.
    let png = image::open(out.join("valley.classes.png")).unwrap();
    assert!(png.width() >= w && png.height() > h);
}

#[test]
fn same_outputs_on_one_and_two_threads() {
    let dir = tempfile::tempdir().unwrap();
    let scene = dir.path().join("valley.tif");
    let (truth, data) = river_valley(120, 90);
    drop(truth);
    write_scene_u16(&scene, 120, 90, &data, 10.0, &GEOKEYS, Some("0"));
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let out = dir.path().join(format!("t{threads}"));
        let o = run(
            &[
                "landcover",
                scene.to_str().unwrap(),
                "-k",
                "4",
                "--mode",
                "soft",
                "--sample",
                "2000",
                "-o",
                out.to_str().unwrap(),
            ],
            &[("RAYON_NUM_THREADS", threads)],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        outs.push(
            common::files_in(&out)
                .into_iter()
                .map(|f| std::fs::read(out.join(&f)).unwrap())
                .collect::<Vec<_>>(),
        );
    }
    assert_eq!(outs[0], outs[1]);
}

/// A scene larger than a tile: both rasters are 256-pixel tiles with overviews in the
/// Cloud-Optimized layout (read back with the `tiff` crate, tests/support/cog.rs), the full
/// resolution holds the classes the document counted, each overview is the 2 × 2 reduction
/// of the level above, and one and two threads write the same bytes.
#[test]
fn large_scene_rasters_are_cloud_optimized_with_overviews() {
    let dir = tempfile::tempdir().unwrap();
    let scene = dir.path().join("valley.tif");
    let (w, h) = (600u32, 520u32);
    let (_, data) = river_valley(w, h);
    write_scene_u16(&scene, w, h, &data, 10.0, &GEOKEYS, Some("0"));
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let out = dir.path().join(format!("t{threads}"));
        let o = run(
            &[
                "landcover",
                scene.to_str().unwrap(),
                "-k",
                "5",
                "-o",
                out.to_str().unwrap(),
            ],
            &[("RAYON_NUM_THREADS", threads)],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        outs.push(out);
    }
    for name in ["valley.classes.tif", "valley.uncertainty.tif"] {
        assert_eq!(
            std::fs::read(outs[0].join(name)).unwrap(),
            std::fs::read(outs[1].join(name)).unwrap(),
            "{name}: same bytes on one and two threads"
        );
    }
    let out = &outs[0];
    assert_eq!(
        common::files_in(out).len(),
        5,
        "no scratch file is left beside the outputs"
    );
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("valley.classes.json")).unwrap()).unwrap();
    let classes = cog::images(&out.join("valley.classes.tif"));
    let unc = cog::images(&out.join("valley.uncertainty.tif"));
    // 600 × 520 → 300 × 260 → 150 × 130.
    assert_eq!(classes.len(), 3);
    cog::check_cog_layout(&classes, w, h, 256, false);
    cog::check_cog_layout(&unc, w, h, 256, false);
    // The project's reader and the tiff crate agree on the full resolution.
    let (_, _, mine) = read_u8_tiff(&out.join("valley.classes.tif"));
    assert!(mine
        .iter()
        .zip(&classes[0].pixels)
        .all(|(&a, &b)| a as f64 == b));
    for cl in doc["classes"].as_array().unwrap() {
        let k = cl["class"].as_u64().unwrap() as u8;
        let n = mine.iter().filter(|&&v| v == k).count() as u64;
        assert_eq!(n, cl["pixels"].as_u64().unwrap(), "class {k}");
        let hex = cl["hex"].as_str().unwrap().trim_start_matches('#');
        let rgb: Vec<u16> = (0..3)
            .map(|i| u16::from_str_radix(&hex[2 * i..2 * i + 2], 16).unwrap() * 257)
            .collect();
        for im in &classes {
            let map = im
                .colour_map
                .as_ref()
                .expect("a colour table on every level");
            let i = k as usize;
            assert_eq!(vec![map[i], map[256 + i], map[512 + i]], rgb);
        }
    }
    for (images, is_classes, nodata) in [(&classes, true, 0.0), (&unc, false, -1.0)] {
        for (i, im) in images.iter().enumerate() {
            // TIFF 6.0: Deflate 8; predictor 2 (horizontal) or 3 (floating point, Adobe TN3).
            let predictor = if is_classes { 2 } else { 3 };
            assert_eq!((im.compression, im.predictor), (8, predictor), "level {i}");
            assert_eq!(
                im.nodata.as_deref(),
                Some(if is_classes { "0" } else { "-1" })
            );
            if i > 0 {
                let up = &images[i - 1];
                let want = cog::reduce(
                    &up.pixels,
                    up.width as usize,
                    up.height as usize,
                    is_classes,
                    nodata,
                );
                assert!(
                    im.pixels
                        .iter()
                        .zip(&want)
                        .all(|(a, b)| (a - b).abs() <= 1e-6 * b.abs().max(1.0)),
                    "level {i} is the reduction of level {}",
                    i - 1
                );
            }
        }
    }
    // Uncertainty nodata exactly where the classes are nodata, on every level.
    for (c, u) in classes.iter().zip(&unc) {
        assert!(c
            .pixels
            .iter()
            .zip(&u.pixels)
            .all(|(&c, &u)| (c == 0.0) == (u == -1.0)));
    }
}

/// Iris (Fisher 1936) as a 150 × 1 four-band float raster through the generic path,
/// unscaled: the SSE equals scikit-learn 1.9.1's KMeans inertia (fixtures/reference/iris_kmeans.json).
#[test]
fn iris_through_the_raster_path_matches_scikit_learn() {
    let doc: Value = serde_json::from_slice(
        &std::fs::read(common::fixture("reference/iris_kmeans.json")).unwrap(),
    )
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
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("iris.tif");
    {
        let mut enc = TiffEncoder::new(std::fs::File::create(&path).unwrap()).unwrap();
        enc.write_image::<colortype::RGBA32Float>(150, 1, &rows)
            .unwrap();
    }
    let out = dir.path().join("out");
    let o = run(
        &[
            "landcover",
            path.to_str().unwrap(),
            "-k",
            "3",
            "--scale",
            "none",
            "--restarts",
            "10",
            "--tolerance",
            "0",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let res: Value =
        serde_json::from_slice(&std::fs::read(out.join("iris.classes.json")).unwrap()).unwrap();
    let want = doc["kmeans"]["inertia"].as_f64().unwrap();
    let sse = res["sse"].as_f64().unwrap();
    assert!(
        (sse - want).abs() / want < 1e-5,
        "SSE {sse} vs scikit-learn {want}"
    );
    assert_eq!(
        res["pixel_area_m2"],
        Value::Null,
        "no georeferencing, no area"
    );
    let sizes: Vec<u64> = res["classes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["pixels"].as_u64().unwrap())
        .collect();
    assert_eq!(
        sizes,
        vec![62, 50, 38],
        "cluster sizes as scikit-learn's labels give"
    );
}

fn refused(args: &[&str], out: &Path, expect: &[&str]) {
    let o = run(args, &[]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert!(!err.contains("panicked"));
    for e in expect {
        assert!(err.contains(e), "expected '{e}' in {err}");
    }
    assert!(
        !out.exists() || common::files_in(out).is_empty(),
        "nothing written"
    );
}

#[test]
fn bad_rasters_and_parameters() {
    let dir = tempfile::tempdir().unwrap();
    let scene = dir.path().join("valley.tif");
    let (_, data) = river_valley(40, 30);
    write_scene_u16(&scene, 40, 30, &data, 10.0, &GEOKEYS, None);
    let s = scene.to_str().unwrap();
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    refused(
        &["landcover", s, "--bands", "2,5", "-o", o],
        &out,
        &["valley.tif", "band 5", "4 bands"],
    );
    refused(
        &["landcover", s, "--index", "ndvi:3,7", "-o", o],
        &out,
        &["valley.tif", "ndvi:3,7", "band 7"],
    );
    refused(
        &["landcover", s, "-k", "0", "-o", o],
        &out,
        &["k must be at least 1"],
    );
    // All pixels nodata.
    let blank = dir.path().join("blank.tif");
    write_scene_u16(&blank, 8, 8, &[0u16; 256], 10.0, &GEOKEYS, Some("0"));
    refused(
        &["landcover", blank.to_str().unwrap(), "-o", o],
        &out,
        &["blank.tif", "nodata"],
    );
    // K larger than the valid pixels.
    let tiny = dir.path().join("tiny.tif");
    write_scene_u16(&tiny, 2, 2, &[5u16; 16], 10.0, &GEOKEYS, None);
    refused(
        &["landcover", tiny.to_str().unwrap(), "-k", "6", "-o", o],
        &out,
        &["tiny.tif", "more than the 4 valid pixels"],
    );
    // Inconsistent georeferencing: a zero pixel size.
    let bad_geo = dir.path().join("badgeo.tif");
    write_scene_u16(&bad_geo, 40, 30, &data, 0.0, &GEOKEYS, None);
    refused(
        &["landcover", bad_geo.to_str().unwrap(), "-o", o],
        &out,
        &["badgeo.tif", "georeferencing"],
    );
    // A file the decoder cannot read.
    let junk = dir.path().join("junk.tif");
    std::fs::write(&junk, b"II*\0garbage that is not a tiff directory").unwrap();
    refused(
        &["landcover", junk.to_str().unwrap(), "-o", o],
        &out,
        &["junk.tif"],
    );
    let cut = dir.path().join("cut.tif");
    let bytes = std::fs::read(&scene).unwrap();
    std::fs::write(&cut, &bytes[..bytes.len() / 3]).unwrap();
    refused(
        &["landcover", cut.to_str().unwrap(), "-o", o],
        &out,
        &["cut.tif"],
    );
}

#[test]
fn rgb_photo_works_as_three_bands() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let input = common::fixture("demo/harbour-poster.png");
    let o = run(
        &[
            "landcover",
            input.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("harbour-poster.classes.json")).unwrap())
            .unwrap();
    assert_eq!(doc["bands"], serde_json::json!([1, 2, 3]));
    assert_eq!(doc["pixel_area_m2"], Value::Null);
}
