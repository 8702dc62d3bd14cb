//! `chromasift landcover` on GeoTIFFs written by GDAL 3.10 through rasterio 1.4
//! (`tests/reference/make_gdal_fixtures.py` → `fixtures/rasters/gdal/`): what is not there is
//! never classified (sparse blocks, masks, alpha, an exclusion raster), areas in Web Mercator
//! and geographic CRSs against pyproj's geodesic areas, scale/offset and band descriptions,
//! undefined indices.

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
        let total = (e["width"].as_u64().unwrap() * e["height"].as_u64().unwrap()) as u64;
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
