//! Pixel corners and pixel areas against pyproj 3.7 / PROJ 9.5 and GeographicLib's polygon
//! area through `pyproj.Geod` (`tests/reference/crs_areas.py` →
//! `fixtures/reference/crs_areas.json`).

use super::*;
use serde_json::Value as Json;

fn reference() -> Json {
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/reference/crs_areas.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn reals(v: &Json) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// GeoTIFF tags for a case: keys for the model type and the EPSG code; ModelPixelScale and
/// ModelTiepoint for north-up grids, ModelTransformation otherwise.
fn tags_for(case: &Json) -> GeoTags {
    let epsg = case["epsg"].as_u64().unwrap() as u16;
    let model = case["model_type"].as_u64().unwrap() as u16;
    let code_key = if model == 2 { 2048 } else { 3072 };
    let c = reals(&case["affine"]);
    let mut g = GeoTags {
        key_directory: Some(GeoTagValue::Short(vec![
            1, 1, 0, 3, 1024, 0, 1, model, 1025, 0, 1, 1, code_key, 0, 1, epsg,
        ])),
        ..GeoTags::default()
    };
    if c[2] == 0.0 && c[4] == 0.0 {
        g.pixel_scale = Some(GeoTagValue::Double(vec![c[1], -c[5], 0.0]));
        g.tiepoint = Some(GeoTagValue::Double(vec![0.0, 0.0, 0.0, c[0], c[3], 0.0]));
    } else {
        g.transformation = Some(GeoTagValue::Double(vec![
            c[1], c[2], 0.0, c[0], c[4], c[5], 0.0, c[3], 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0,
        ]));
    }
    g
}

#[test]
fn pixel_corners_match_pyproj() {
    for case in reference()["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let grid = GridCrs::from_tags(&tags_for(case));
        let e = grid
            .crs
            .ellipsoid()
            .unwrap_or_else(|| panic!("{name}: no ellipsoid"));
        let ell = reals(&case["ellipsoid"]);
        assert!(
            (e.a - ell[0]).abs() < 1e-6 && (1.0 / e.f - ell[1]).abs() < 1e-6,
            "{name}"
        );
        for p in case["pixels"].as_array().unwrap() {
            let (col, row) = (p["col"].as_f64().unwrap(), p["row"].as_f64().unwrap());
            let corners = [
                (col, row),
                (col + 1.0, row),
                (col + 1.0, row + 1.0),
                (col, row + 1.0),
            ];
            for (k, &(x, y)) in corners.iter().enumerate() {
                let want = reals(&p["corners_lonlat"][k]);
                let (lon, lat) = grid.pixel_to_lonlat(x, y).unwrap();
                // 1e-10 degrees is about 0.01 mm on the ground.
                assert!(
                    (lon - want[0]).abs() < 1e-10 && (lat - want[1]).abs() < 1e-10,
                    "{name} pixel ({col}, {row}) corner {k}: ({lon}, {lat}) vs {want:?}"
                );
            }
        }
    }
}

#[test]
fn pixel_areas_match_geodesic_polygons() {
    for case in reference()["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let (w, h) = (
            case["width"].as_u64().unwrap(),
            case["height"].as_u64().unwrap(),
        );
        let areas = PixelAreas::new(&tags_for(case), w as u32, h as u32);
        let rotated = reals(&case["affine"])[2] != 0.0;
        let expect_method = if case["model_type"] == 2 || (case["epsg"] == 3857 && !rotated) {
            AreaMethod::EllipsoidPerRow
        } else {
            AreaMethod::EllipsoidLattice
        };
        assert_eq!(areas.method, expect_method, "{name}");
        for p in case["pixels"].as_array().unwrap() {
            let (col, row) = (
                p["col"].as_u64().unwrap() as u32,
                p["row"].as_u64().unwrap() as u32,
            );
            let want = p["area_m2"].as_f64().unwrap();
            let got = areas.at(col, row).unwrap();
            assert!(
                ((got - want) / want).abs() < 1e-7,
                "{name} pixel ({col}, {row}): {got} m² vs pyproj {want} m²"
            );
            let mut line = vec![0.0; w as usize];
            assert!(areas.row_into(row, &mut line));
            assert_eq!(line[col as usize], got, "{name}: row_into agrees with at");
        }
    }
}

#[test]
fn web_mercator_pixels_at_48n_are_far_below_their_projected_size() {
    // The case: 10 m Web Mercator pixels at 47.8°N cover about 45 m², not 100 m².
    let case = reference()["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["epsg"] == 3857)
        .unwrap()
        .clone();
    let areas = PixelAreas::new(&tags_for(&case), 300, 300);
    let a = areas.at(0, 0).unwrap();
    assert!((44.0..46.5).contains(&a), "{a}");
    assert_eq!(areas.method.name(), "ellipsoid-geodesic-per-row");
}

fn keys(entries: &[[u16; 4]]) -> GeoTags {
    let mut dir = vec![1, 1, 0, entries.len() as u16];
    for e in entries {
        dir.extend_from_slice(e);
    }
    GeoTags {
        key_directory: Some(GeoTagValue::Short(dir)),
        pixel_scale: Some(GeoTagValue::Double(vec![10.0, 10.0, 0.0])),
        tiepoint: Some(GeoTagValue::Double(vec![
            0.0, 0.0, 0.0, 1000.0, 2000.0, 0.0,
        ])),
        ..GeoTags::default()
    }
}

#[test]
fn equal_area_other_and_unknown_crs_are_named() {
    // LAEA Europe (EPSG 3035) is equal-area: the projected size is the ground area.
    let a = PixelAreas::new(&keys(&[[1024, 0, 1, 1], [3072, 0, 1, 3035]]), 4, 4);
    assert_eq!(a.method, AreaMethod::EqualAreaProjection);
    assert_eq!(a.uniform(), Some(100.0));
    // A user-defined Albers (CT 11) in metres is equal-area too.
    let a = PixelAreas::new(
        &keys(&[
            [1024, 0, 1, 1],
            [3072, 0, 1, 32767],
            [3075, 0, 1, 11],
            [3076, 0, 1, 9001],
        ]),
        4,
        4,
    );
    assert_eq!(a.method, AreaMethod::EqualAreaProjection);
    // Lambert conformal (EPSG 2154) is not: the size is kept and marked uncorrected.
    let a = PixelAreas::new(&keys(&[[1024, 0, 1, 1], [3072, 0, 1, 2154]]), 4, 4);
    assert_eq!(a.method, AreaMethod::ProjectedPlane);
    assert_eq!(a.method.name(), "projected-pixel-size-uncorrected");
    // Feet, no keys, geocentric: no area, with the reason in the note.
    for (g, why) in [
        (
            keys(&[[1024, 0, 1, 1], [3072, 0, 1, 2263], [3076, 0, 1, 9002]]),
            "not metres",
        ),
        (keys(&[[1024, 0, 1, 3]]), "geocentric"),
        (keys(&[[1024, 0, 1, 2], [2048, 0, 1, 4001]]), "no ellipsoid"),
    ] {
        let a = PixelAreas::new(&g, 4, 4);
        assert_eq!(a.method, AreaMethod::Unavailable, "{why}");
        assert!(a.note.contains(why), "{}", a.note);
        assert_eq!(a.at(0, 0), None);
    }
    let a = PixelAreas::new(&GeoTags::default(), 4, 4);
    assert!(!a.is_known());
}

#[test]
fn user_defined_ellipsoid_from_its_axes() {
    // A geographic CRS given by semi-major axis and inverse flattening in GeoDoubleParams
    // equals WGS 84 by code.
    let mut g = keys(&[
        [1024, 0, 1, 2],
        [2048, 0, 1, 32767],
        [2057, 34736, 1, 0],
        [2059, 34736, 1, 1],
    ]);
    g.double_params = Some(GeoTagValue::Double(vec![6_378_137.0, 298.257_223_563]));
    g.pixel_scale = Some(GeoTagValue::Double(vec![0.001, 0.001, 0.0]));
    g.tiepoint = Some(GeoTagValue::Double(vec![0.0, 0.0, 0.0, 10.0, 50.0, 0.0]));
    let mut by_code = g.clone();
    by_code.key_directory = Some(GeoTagValue::Short(vec![
        1, 1, 0, 2, 1024, 0, 1, 2, 2048, 0, 1, 4326,
    ]));
    let (a, b) = (PixelAreas::new(&g, 3, 3), PixelAreas::new(&by_code, 3, 3));
    assert_eq!(a.method, AreaMethod::EllipsoidPerRow);
    assert_eq!(a.at(1, 2), b.at(1, 2));
}

#[test]
fn pixel_is_point_shifts_by_half_a_pixel() {
    let area = keys(&[[1024, 0, 1, 1], [1025, 0, 1, 1], [3072, 0, 1, 32633]]);
    let point = keys(&[[1024, 0, 1, 1], [1025, 0, 1, 2], [3072, 0, 1, 32633]]);
    let (ta, tp) = (
        PixelToModel::from_tags(&area).unwrap(),
        PixelToModel::from_tags(&point).unwrap(),
    );
    assert_eq!(ta.apply(0.0, 0.0), (1000.0, 2000.0));
    assert_eq!(tp.apply(0.5, 0.5), (1000.0, 2000.0));
}
