//! `chromasift landcover` on GeoTIFFs written by GDAL 3.10 through rasterio 1.4
//! (`tests/reference/make_gdal_fixtures.py` → `fixtures/rasters/gdal/`): what is not there is
//! never classified (sparse blocks, masks, alpha, an exclusion raster), areas in Web Mercator
//! and geographic CRSs against pyproj's geodesic areas, scale/offset and band descriptions,
//! undefined indices.

#[path = "support/cog.rs"]
mod cog;
mod common;

use common::{run, stderr};
use serde_json::Value;
use std::path::{Path, PathBuf};

fn gdal(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures/rasters/gdal")
        .join(name)
}

fn expected(name: &str) -> Value {
    let all: Value =
        serde_json::from_slice(&std::fs::read(gdal("expected.json")).unwrap()).unwrap();
    all["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["file"] == name)
        .unwrap()
        .clone()
}

/// Runs `landcover` on a fixture with extra flags; returns the classes document and the
/// standard error.
fn landcover(name: &str, extra: &[&str]) -> (Value, String) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let input = gdal(name);
    let mut args = vec!["landcover", input.to_str().unwrap(), "-k", "3", "-o"];
    args.push(out.to_str().unwrap());
    args.extend_from_slice(extra);
    let o = run(&args, &[]);
    assert!(o.status.success(), "{name}: {}", stderr(&o));
    let stem = name.trim_end_matches(".tif");
    let doc =
        serde_json::from_slice(&std::fs::read(out.join(format!("{stem}.classes.json"))).unwrap())
            .unwrap();
    (doc, stderr(&o))
}

#[test]
fn pixels_that_are_not_there_are_never_classified() {
    for (name, key) in [
        ("sparse_none_tiles.tif", "sparse_blocks"),
        ("sparse_lzw_tiles.tif", "sparse_blocks"),
        ("sparse_deflate_tiles.tif", "sparse_blocks"),
        ("sparse_zstd_tiles.tif", "sparse_blocks"),
        ("mask_internal.tif", "gdal_mask"),
        ("mask_external.tif", "gdal_mask"),
        ("alpha_4band.tif", "alpha_band"),
        ("alpha_rgba.tif", "alpha_band"),
    ] {
        let e = expected(name);
        let (doc, _) = landcover(name, &[]);
        let total = e["width"].as_u64().unwrap() * e["height"].as_u64().unwrap();
        assert_eq!(doc["valid_pixels"], e["valid"], "{name}");
        assert_eq!(
            doc["nodata_pixels"].as_u64().unwrap(),
            total - e["valid"].as_u64().unwrap()
        );
        assert!(
            !doc[key].is_null() && doc[key] != 0,
            "{name}: {key} recorded"
        );
        // Alpha is not a feature: the bands used are the data bands only.
        assert_eq!(
            doc["bands"].as_array().unwrap().len() as u64,
            e["bands"].as_u64().unwrap()
        );
    }
}

#[test]
fn exclusion_raster_leaves_its_pixels_out_or_is_refused() {
    let clouds = gdal("clouds_same_grid.tif");
    let (doc, _) = landcover("scale_offset.tif", &["--exclude", clouds.to_str().unwrap()]);
    assert_eq!(
        doc["valid_pixels"],
        expected("scale_offset.tif + clouds_same_grid.tif")["valid"]
    );
    assert!(doc["excluded_by"]
        .as_str()
        .unwrap()
        .ends_with("clouds_same_grid.tif"));
    let dir = tempfile::tempdir().unwrap();
    let other = gdal("clouds_other_grid.tif");
    let o = run(
        &[
            "landcover",
            gdal("scale_offset.tif").to_str().unwrap(),
            "-k",
            "3",
            "--exclude",
            other.to_str().unwrap(),
            "-o",
            dir.path().join("out").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("clouds_other_grid.tif") && err.contains("not on the grid"),
        "{err}"
    );
    assert!(!dir.path().join("out").exists(), "nothing written");
}

#[test]
fn areas_in_web_mercator_and_geographic_scenes_match_pyproj() {
    for (name, method) in [
        ("webmercator_scene.tif", "ellipsoid-geodesic-per-row"),
        ("geographic_scene.tif", "ellipsoid-geodesic-per-row"),
    ] {
        let want = expected(name)["footprint_area_m2"].as_f64().unwrap();
        let (doc, _) = landcover(name, &[]);
        assert_eq!(doc["area_method"], method, "{name}");
        let total: f64 = doc["classes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["area_m2"].as_f64().unwrap())
            .sum();
        assert!(
            ((total - want) / want).abs() < 1e-7,
            "{name}: {total} m² vs pyproj {want} m²"
        );
        let ha: f64 = doc["classes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["hectares"].as_f64().unwrap())
            .sum();
        assert!((ha - want / 1e4).abs() < 1e-7 * ha);
    }
    // 10 m Web Mercator pixels at 47.8°N hold about 45 m² of ground, not 100 m².
    let (doc, _) = landcover("webmercator_scene.tif", &[]);
    assert_eq!(doc["pixel_area_m2"], Value::Null);
    let c = &doc["classes"][0];
    let per_pixel = c["area_m2"].as_f64().unwrap() / c["pixels"].as_f64().unwrap();
    assert!((44.5..46.0).contains(&per_pixel), "{per_pixel}");
}

#[test]
fn scale_offset_and_descriptions_reach_features_and_statistics() {
    let e = expected("scale_offset.tif");
    let (doc, _) = landcover("scale_offset.tif", &["--index", "ndvi:3,4"]);
    assert_eq!(
        doc["band_scale_offset"][0],
        serde_json::json!([0.0001, -0.1])
    );
    let classes = doc["classes"].as_array().unwrap();
    let valid = doc["valid_pixels"].as_f64().unwrap();
    assert_eq!(valid, e["valid"].as_f64().unwrap());
    for (k, name) in ["blue", "green", "red", "nir"].iter().enumerate() {
        // The pixel-weighted class means give the scene mean in physical units, which the
        // script computed from the stored values with rasterio's scale and offset.
        let mean: f64 = classes
            .iter()
            .map(|c| c["bands"][k]["mean"].as_f64().unwrap() * c["pixels"].as_f64().unwrap())
            .sum::<f64>()
            / valid;
        let want = e["sums"][k].as_f64().unwrap() / valid;
        assert!((mean - want).abs() < 1e-6, "band {k}: {mean} vs {want}");
        assert_eq!(classes[0]["bands"][k]["description"], *name);
    }
    let out = tempfile::tempdir().unwrap();
    let o = run(
        &[
            "landcover",
            gdal("scale_offset.tif").to_str().unwrap(),
            "-k",
            "2",
            "-o",
            out.path().to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success());
    let csv = std::fs::read_to_string(out.path().join("scale_offset.classes.csv")).unwrap();
    assert!(csv.lines().next().unwrap().contains("mean_4_nir"), "{csv}");
}

#[test]
fn undefined_index_is_a_missing_feature_not_nodata() {
    // Red and NIR are both 0 on 64 pixels: NDVI is undefined there, but the pixels hold data
    // and are classed (with the index at its stated neutral value) and counted.
    let e = expected("undefined_ndvi.tif");
    let (doc, _) = landcover("undefined_ndvi.tif", &["--index", "ndvi:3,4"]);
    assert_eq!(doc["valid_pixels"], e["valid"]);
    assert_eq!(doc["nodata_pixels"], 0);
    assert_eq!(doc["undefined_index_pixels"], e["undefined_ndvi_3_4"]);
    assert_eq!(doc["undefined_index_value"], 0.0);
}

/// The tags of the first image of a TIFF, read with the `tiff` crate's decoder.
fn tags(path: &Path) -> (bool, u16, u16, Option<u16>, Option<Vec<u16>>) {
    use tiff::tags::Tag;
    let bytes = std::fs::read(path).unwrap();
    let big = bytes[2] == 43 || bytes[3] == 43;
    let mut d = tiff::decoder::Decoder::new(std::fs::File::open(path).unwrap()).unwrap();
    let compression = d.get_tag_u32(Tag::Compression).unwrap() as u16;
    let photometric = d.get_tag_u32(Tag::PhotometricInterpretation).unwrap() as u16;
    let predictor = d.find_tag_unsigned::<u16>(Tag::Predictor).unwrap();
    let map = d.find_tag_unsigned_vec::<u16>(Tag::ColorMap).unwrap();
    (big, compression, photometric, predictor, map)
}

#[test]
fn output_rasters_are_compressed_with_a_colour_table_and_bigtiff_when_large() {
    for (env, big) in [(None, false), (Some("1000"), true)] {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        let input = gdal("scale_offset.tif");
        let envs: Vec<(&str, &str)> = env
            .map(|v| ("CHROMASIFT_BIGTIFF_ABOVE", v))
            .into_iter()
            .collect();
        let o = run(
            &[
                "landcover",
                input.to_str().unwrap(),
                "-k",
                "3",
                "-o",
                out.to_str().unwrap(),
            ],
            &envs,
        );
        assert!(o.status.success(), "{}", stderr(&o));
        let doc: Value =
            serde_json::from_slice(&std::fs::read(out.join("scale_offset.classes.json")).unwrap())
                .unwrap();
        // Class raster: TIFF 6.0 palette image (PhotometricInterpretation 3, ColorMap of
        // 3 × 256 SHORTs scaled to 0..65535), Deflate (8, the code GDAL writes) with the
        // horizontal predictor (2); BigTIFF (version 43) only past the size limit.
        let (b, compression, photometric, predictor, map) =
            tags(&out.join("scale_offset.classes.tif"));
        assert_eq!(
            (b, compression, photometric, predictor),
            (big, 8, 3, Some(2))
        );
        let map = map.expect("a colour table");
        assert_eq!(map.len(), 768);
        assert_eq!(
            (map[0], map[256], map[512]),
            (0, 0, 0),
            "class 0 (nodata) is black"
        );
        for c in doc["classes"].as_array().unwrap() {
            let i = c["class"].as_u64().unwrap() as usize;
            let hex = c["hex"].as_str().unwrap().trim_start_matches('#');
            let rgb: Vec<u16> = (0..3)
                .map(|k| u16::from_str_radix(&hex[2 * k..2 * k + 2], 16).unwrap() * 257)
                .collect();
            assert_eq!(vec![map[i], map[256 + i], map[512 + i]], rgb, "class {i}");
        }
        let (b, compression, photometric, predictor, _) =
            tags(&out.join("scale_offset.uncertainty.tif"));
        assert_eq!((b, compression, photometric), (big, 8, 1));
        assert_eq!(predictor, Some(3), "floating-point predictor (Adobe TN3)");
        // Both tiled (TIFF 6.0 §15: TileWidth/TileLength 256), one tile and no overview at
        // 64 × 48, the directory right after the header (8 bytes, or 16 in BigTIFF).
        for name in ["scale_offset.classes.tif", "scale_offset.uncertainty.tif"] {
            let path = out.join(name);
            assert_eq!(cog::is_bigtiff(&path), big);
            let images = cog::images(&path);
            assert_eq!(images.len(), 1);
            cog::check_cog_layout(&images, 64, 48, 256, big);
        }
        // Both read back through the project's reader with the input's valid pixel count.
        let mut r = chromasift::geotiff::GeoRaster::open(
            &out.join("scale_offset.classes.tif"),
            &chromasift::limits::Limits::default(),
        )
        .unwrap();
        let mut classed = 0u64;
        for i in 0..r.block_count() {
            classed += r
                .read_block(i)
                .unwrap()
                .data
                .iter()
                .filter(|&&v| v > 0.0)
                .count() as u64;
        }
        assert_eq!(classed, doc["valid_pixels"].as_u64().unwrap());
    }
}

/// Writes a 96 × 96 four-band u16 TIFF of hash noise (no structure: k-means has many equal
/// local optima on it).
fn noise_scene(path: &Path) {
    use tiff::encoder::{colortype, TiffEncoder};
    let data: Vec<u16> = (0..96u64 * 96 * 4)
        .map(|i| ((i.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 40) % 60_000) as u16)
        .collect();
    let mut enc = TiffEncoder::new(std::fs::File::create(path).unwrap()).unwrap();
    enc.write_image::<colortype::RGBA16>(96, 96, &data).unwrap();
}

#[test]
fn disagreeing_starts_are_reported() {
    let dir = tempfile::tempdir().unwrap();
    let scene = dir.path().join("noise.tif");
    noise_scene(&scene);
    let out = dir.path().join("out");
    // Textbook k-means (no refinement) on structureless noise: a second start lands in a
    // different partition (adjusted Rand index about 0.75 with this engine).
    let o = run(
        &[
            "landcover",
            scene.to_str().unwrap(),
            "-k",
            "4",
            "--refine",
            "none",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("noise.classes.json")).unwrap()).unwrap();
    let check = &doc["restart_check"];
    assert_eq!(check["disagree"], true, "{check}");
    assert!(check["ari"].as_f64().unwrap() < 0.8);
    assert_eq!(doc["warnings"].as_array().unwrap().len(), 1);
    let err = stderr(&o);
    assert!(
        err.lines()
            .any(|l| l.starts_with("chromasift: warning:") && l.contains("--restarts")),
        "{err}"
    );
    // A scene with clear classes: the two starts agree and nothing is said.
    let (doc, err) = landcover("scale_offset.tif", &[]);
    assert_eq!(doc["restart_check"]["disagree"], false);
    assert!(doc["restart_check"]["ari"].as_f64().unwrap() >= 0.99);
    assert!(!err.contains("warning"), "{err}");
}

#[test]
fn one_file_per_band_reads_as_one_scene() {
    // The four bands of `utm_u16_4band_strips.tif`, written by GDAL as four single-band
    // files with four layouts (strips, Deflate tiles, LZW strips, ZSTD tiles;
    // `tests/reference/make_band_files.py`), listed in `scene.stack`: the split must be the
    // one of the stacked file, pixel for pixel, with each band named after its file.
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rasters");
    let dir = tempfile::tempdir().unwrap();
    let split = |input: &Path, out: &str| -> (Vec<f32>, Value, String) {
        let o = dir.path().join(out);
        let r = run(
            &[
                "landcover",
                input.to_str().unwrap(),
                "-k",
                "3",
                "-o",
                o.to_str().unwrap(),
            ],
            &[],
        );
        assert!(r.status.success(), "{}", stderr(&r));
        let stem = input.file_stem().unwrap().to_str().unwrap();
        let doc: Value =
            serde_json::from_slice(&std::fs::read(o.join(format!("{stem}.classes.json"))).unwrap())
                .unwrap();
        let limits = chromasift::limits::Limits::default();
        let mut raster =
            chromasift::geotiff::GeoRaster::open(&o.join(format!("{stem}.classes.tif")), &limits)
                .unwrap();
        let mut classes = Vec::new();
        for b in 0..raster.block_count() {
            classes.extend(raster.read_block(b).unwrap().data);
        }
        let csv = std::fs::read_to_string(o.join(format!("{stem}.classes.csv"))).unwrap();
        (classes, doc, csv)
    };
    let (one, one_doc, _) = split(&root.join("utm_u16_4band_strips.tif"), "one");
    let (stack, stack_doc, csv) = split(&root.join("bands/scene.stack"), "stack");
    assert_eq!(one, stack, "the same classes pixel for pixel");
    assert_eq!(stack_doc["valid_pixels"], one_doc["valid_pixels"]);
    assert_eq!(stack_doc["nodata_pixels"], one_doc["nodata_pixels"]);
    assert_eq!(stack_doc["crs"], one_doc["crs"]);
    let header = csv.lines().next().unwrap();
    assert!(
        header.contains("mean_1_B1") && header.contains("mean_4_B4"),
        "{header}"
    );

    // A band on a grid shifted by one pixel is refused in one line naming it.
    let out = dir.path().join("shifted");
    let r = run(
        &[
            "landcover",
            root.join("bands/shifted.stack").to_str().unwrap(),
            "-k",
            "3",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(r.status.code(), Some(2));
    let err = stderr(&r);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("B4_shifted.tif") && err.contains("not on the grid"),
        "{err}"
    );
    assert!(!out.exists(), "nothing written");
}

#[test]
fn hyperspectral_scenes_of_256_bands_are_split_and_257_refused() {
    // GDAL-written (`tests/reference/make_band_files.py`): 256 u16 bands, band-interleaved,
    // Deflate; two halves with different invented spectra. Each class's mean of every band
    // must be the half's mean as numpy computes it (`hyper_256.json`).
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rasters/bands");
    let want: Value =
        serde_json::from_slice(&std::fs::read(root.join("hyper_256.json")).unwrap()).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let o = run(
        &[
            "landcover",
            root.join("hyper_256.tif").to_str().unwrap(),
            "-k",
            "2",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("hyper_256.classes.json")).unwrap())
            .unwrap();
    assert_eq!(doc["bands"].as_array().unwrap().len(), 256);
    let classes = doc["classes"].as_array().unwrap();
    assert_eq!(classes.len(), 2);
    let mut halves_seen = Vec::new();
    for c in classes {
        assert_eq!(c["pixels"], 24);
        let bands = c["bands"].as_array().unwrap();
        assert_eq!(bands.len(), 256);
        // Left half: 1000 + 20 b; right half: 6000 − 15 b (plus a ripple below 7).
        let half = if bands[0]["mean"].as_f64().unwrap() < 3000.0 {
            "left"
        } else {
            "right"
        };
        halves_seen.push(half);
        for (b, band) in bands.iter().enumerate() {
            let (got, exp) = (
                band["mean"].as_f64().unwrap(),
                want[half][b].as_f64().unwrap(),
            );
            assert!(
                (got - exp).abs() < 1e-9 * exp,
                "{half} band {}: {got} vs {exp}",
                b + 1
            );
        }
    }
    halves_seen.sort();
    assert_eq!(halves_seen, ["left", "right"]);

    let o = run(
        &[
            "landcover",
            root.join("hyper_257.tif").to_str().unwrap(),
            "-k",
            "2",
            "-o",
            dir.path().join("over").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("hyper_257.tif") && err.contains("257 bands"),
        "{err}"
    );
}

/// The later steps measure ground as `landcover` does: on a Web Mercator scene the label
/// table, the minimum mapping unit and the assessment's areas all use each pixel's ground
/// area (pyproj's geodesic footprint of the whole scene, `footprint_area_m2`, written by
/// `tests/reference/make_gdal_fixtures.py`), not the projected pixel size.
#[test]
fn labels_and_assessment_measure_web_mercator_ground() {
    let want = expected("webmercator_scene.tif")["footprint_area_m2"]
        .as_f64()
        .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let input = gdal("webmercator_scene.tif");
    let ok = |args: &[&str]| {
        let o = run(args, &[]);
        assert!(o.status.success(), "{args:?}: {}", stderr(&o));
    };
    let classes_dir = d.join("classes");
    ok(&[
        "landcover",
        input.to_str().unwrap(),
        "-k",
        "3",
        "-o",
        classes_dir.to_str().unwrap(),
    ]);
    let classes = classes_dir.join("webmercator_scene.classes.tif");
    let labels = d.join("labels.csv");
    std::fs::write(&labels, "class,label\n1,a\n2,b\n3,c\n").unwrap();
    let map = d.join("map");
    ok(&[
        "landcover-label",
        classes.to_str().unwrap(),
        "--labels",
        labels.to_str().unwrap(),
        "--min-unit",
        "0.1ha",
        "-o",
        map.to_str().unwrap(),
    ]);
    let doc: Value =
        serde_json::from_slice(&std::fs::read(map.join("webmercator_scene.labels.json")).unwrap())
            .unwrap();
    let total: f64 = doc["labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["area_m2"].as_f64().unwrap())
        .sum();
    assert!((total - want).abs() < 1e-6 * want, "{total} against {want}");
    // 0.1 ha in pixels of the scene's mean ground area (all 3072 pixels are valid).
    let per_pixel = want / 3072.0;
    assert!((doc["pixel_area_m2"].as_f64().unwrap() - per_pixel).abs() < 1e-6 * per_pixel);
    assert_eq!(
        doc["min_unit_pixels"].as_u64().unwrap(),
        (1000.0 / per_pixel).ceil() as u64
    );
    // The map checked against a copy of itself: every pixel agrees, every area counts.
    let survey = d.join("survey.tif");
    std::fs::copy(&classes, &survey).unwrap();
    let check = d.join("check");
    ok(&[
        "landcover-assess",
        classes.to_str().unwrap(),
        "--reference",
        survey.to_str().unwrap(),
        "-o",
        check.to_str().unwrap(),
    ]);
    let a: Value = serde_json::from_slice(
        &std::fs::read(check.join("webmercator_scene.assessment.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(a["area_unit"], "m2");
    assert_eq!(a["area_method"], "ellipsoid-geodesic-per-row");
    let total = a["areas"]["total_area"].as_f64().unwrap();
    assert!((total - want).abs() < 1e-6 * want, "{total} against {want}");
}

/// A PNG's fully transparent pixels are no data, as alpha 0 is in a TIFF: the demo aerial
/// photo's transparent corner (alpha 0 where `fixtures/tiles`, cut from it, hold nodata).
#[test]
fn transparent_png_pixels_are_not_classified() {
    let input = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo/valley-aerial.png");
    let rgba = image::open(&input).unwrap().to_rgba8();
    let clear = rgba.pixels().filter(|p| p[3] == 0).count() as u64;
    assert!(clear > 0);
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let o = run(
        &[
            "landcover",
            input.to_str().unwrap(),
            "-k",
            "5",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("valley-aerial.classes.json")).unwrap())
            .unwrap();
    assert_eq!(doc["nodata_pixels"].as_u64().unwrap(), clear);
    assert_eq!(doc["alpha_band"], 4);
    // The class raster carries a colour table, which the `tiff` crate's decoder does not
    // read: its samples are read through our reader.
    let mut r = chromasift::geotiff::GeoRaster::open(
        &out.join("valley-aerial.classes.tif"),
        &chromasift::limits::Limits::default(),
    )
    .unwrap();
    // The band is named as GDAL names bands (GDAL_METADATA DESCRIPTION), for a GIS.
    assert_eq!(
        r.info().descriptions,
        vec![Some("class (0 = nodata)".to_string())]
    );
    let u = chromasift::geotiff::GeoRaster::open(
        &out.join("valley-aerial.uncertainty.tif"),
        &chromasift::limits::Limits::default(),
    )
    .unwrap();
    assert!(u.info().descriptions[0]
        .as_deref()
        .is_some_and(|d| d.starts_with("uncertainty")));
    let mut classes = Vec::new();
    for i in 0..r.block_count() {
        classes.extend(r.read_block(i).unwrap().data);
    }
    assert_eq!(classes.len() as u32, rgba.width() * rgba.height());
    for (p, &c) in rgba.pixels().zip(&classes) {
        assert_eq!(p[3] == 0, c == 0.0);
    }
}
