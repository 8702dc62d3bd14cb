//! `chromasift landcover` on an invented river-valley scene (recovery, georeferencing,
//! areas, uncertainty), Iris through the generic path against scikit-learn, bad input.

mod common;

use chromasift::geotiff;
use chromasift::rng::Rng;
use common::{run, stderr};
use serde_json::Value;
use std::path::Path;
use tiff::encoder::{colortype, TiffEncoder};
use tiff::tags::Tag;

/// GeoTIFF keys of our scenes: projected (GTModelType 1), pixel is area, WGS 84 / UTM
/// zone 33N (EPSG 32633), metres (9001).
const GEOKEYS: [u16; 20] = [
    1, 1, 0, 4, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32633, 3076, 0, 1, 9001,
];

fn write_scene_u16(
    path: &Path,
    w: u32,
    h: u32,
    bands4: &[u16],
    pixel_m: f64,
    geokeys: &[u16],
    nodata: Option<&str>,
) {
    let file = std::fs::File::create(path).unwrap();
    let mut enc = TiffEncoder::new(file).unwrap();
    let mut img = enc.new_image::<colortype::RGBA16>(w, h).unwrap();
    img.encoder()
        .write_tag(Tag::Unknown(33550), &[pixel_m, pixel_m, 0.0][..])
        .unwrap();
    img.encoder()
        .write_tag(
            Tag::Unknown(33922),
            &[0.0, 0.0, 0.0, 500_000.0, 5_000_000.0, 0.0][..],
        )
        .unwrap();
    img.encoder()
        .write_tag(Tag::Unknown(34735), geokeys)
        .unwrap();
    if let Some(n) = nodata {
        img.encoder().write_tag(Tag::Unknown(42113), n).unwrap();
    }
    img.write_data(bands4).unwrap();
}

/// Reflectance spectra (blue, green, red, near infrared) of the invented surfaces.
const SURFACES: [[f64; 4]; 5] = [
    [0.06, 0.05, 0.03, 0.02], // water
    [0.03, 0.06, 0.04, 0.40], // woodland
    [0.05, 0.11, 0.07, 0.58], // crops
    [0.12, 0.16, 0.22, 0.28], // bare soil
    [0.20, 0.20, 0.21, 0.23], // built-up
];

/// The invented river valley: truth class per pixel (0 = nodata edge) and the scene.
/// Each pixel sees its 3 × 3 neighbourhood (a sensor's point spread), so pixels on a
/// boundary are mixtures, as in real imagery; then sensor noise is added.
fn river_valley(w: u32, h: u32) -> (Vec<u8>, Vec<u16>) {
    let mut truth = vec![0u8; (w * h) as usize];
    for y in 0..h {
        for x in 6..w {
            let (xf, yf) = (x as f64, y as f64);
            let river_x = w as f64 * 0.45 + 12.0 * (yf / 15.0).sin();
            let t = if (xf - river_x).abs() < 5.0 {
                0
            } else if xf < river_x {
                if yf < h as f64 * 0.55 {
                    1
                } else {
                    3
                }
            } else if xf > w as f64 * 0.8 && yf > h as f64 * 0.6 {
                4
            } else {
                2
            };
            truth[(y * w + x) as usize] = t + 1;
        }
    }
    let mut data = vec![0u16; (w * h * 4) as usize];
    let mut r = Rng::new(2026, 0);
    for y in 0..h as i64 {
        for x in 0..w as i64 {
            let p = (y * w as i64 + x) as usize;
            if truth[p] == 0 {
                continue; // nodata edge
            }
            let mut mean = [0.0f64; 4];
            let mut n = 0.0;
            for dy in -1..=1i64 {
                for dx in -1..=1i64 {
                    let (xx, yy) = (x + dx, y + dy);
                    if xx < 0 || yy < 0 || xx >= w as i64 || yy >= h as i64 {
                        continue;
                    }
                    let t = truth[(yy * w as i64 + xx) as usize];
                    if t == 0 {
                        continue;
                    }
                    for b in 0..4 {
                        mean[b] += SURFACES[t as usize - 1][b];
                    }
                    n += 1.0;
                }
            }
            for b in 0..4 {
                // Gaussian noise of 0.006 reflectance (Box–Muller).
                let (u1, u2) = (r.uniform().max(1e-300), r.uniform());
                let noise = (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos() * 0.006;
                data[p * 4 + b] = ((mean[b] / n + noise).max(0.001) * 10_000.0).round() as u16;
            }
        }
    }
    (truth, data)
}

/// Adjusted Rand index (Hubert & Arabie 1985) of two labelings.
fn adjusted_rand(a: &[u8], b: &[u8]) -> f64 {
    let mut table = std::collections::HashMap::new();
    let mut ra = std::collections::HashMap::new();
    let mut rb = std::collections::HashMap::new();
    for (&x, &y) in a.iter().zip(b) {
        *table.entry((x, y)).or_insert(0f64) += 1.0;
        *ra.entry(x).or_insert(0f64) += 1.0;
        *rb.entry(y).or_insert(0f64) += 1.0;
    }
    let c2 = |n: f64| n * (n - 1.0) / 2.0;
    let index: f64 = table.values().map(|&n| c2(n)).sum();
    let sa: f64 = ra.values().map(|&n| c2(n)).sum();
    let sb: f64 = rb.values().map(|&n| c2(n)).sum();
    let expected = sa * sb / c2(a.len() as f64);
    (index - expected) / (0.5 * (sa + sb) - expected)
}

/// The class raster's values, through the project's reader (the `tiff` crate's own
/// `read_image` does not decode palette images).
fn read_u8_tiff(path: &Path) -> (u32, u32, Vec<u8>) {
    let mut r = geotiff::GeoRaster::open(path, &chromasift::limits::Limits::default()).unwrap();
    let (w, h) = (r.info().width, r.info().height);
    assert_eq!(r.info().bands, 1);
    let mut v = Vec::new();
    for i in 0..r.block_count() {
        v.extend(r.read_block(i).unwrap().data.iter().map(|&x| x as u8));
    }
    (w, h, v)
}

fn read_f32_tiff(path: &Path) -> Vec<f32> {
    let mut d = tiff::decoder::Decoder::new(std::fs::File::open(path).unwrap()).unwrap();
    let tiff::decoder::DecodingResult::F32(v) = d.read_image().unwrap() else {
        panic!("float raster expected")
    };
    v
}

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
