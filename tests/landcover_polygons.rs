//! `landcover-label --polygons`: the valley's labelled map as GeoJSON (RFC 7946) and
//! GeoPackage (OGC 12-128r18). Checks: per label, the polygons' area equals the raster's
//! within 0.1 % — planar area of the GeoPackage rings in the raster's CRS against pixels ×
//! pixel area, and geodesic area of the GeoJSON rings on WGS 84 (geographiclib, Karney
//! 2013) against the per-pixel ground areas of the CRS module; ring orientation as RFC 7946
//! §3.1.6 asks; GeoPackage tables, application id and geometry header as the standard
//! defines them (read back with SQLite and our own reading of the bytes here).

mod common;
#[path = "support/valley.rs"]
mod valley;

use common::{run, stderr};
use geographiclib_rs::{Geodesic, PolygonArea, Winding};
use serde_json::Value;
use std::collections::BTreeMap;
use std::path::Path;
use valley::{read_u8_tiff, river_valley, write_scene_u16, GEOKEYS};

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn signed_area(r: &[(f64, f64)]) -> f64 {
    r.windows(2)
        .map(|w| w[0].0 * w[1].1 - w[1].0 * w[0].1)
        .sum::<f64>()
        / 2.0
}

/// Reads a GeoPackageBinary polygon: (srs id, rings).
fn read_gpkg_polygon(b: &[u8]) -> (i32, Vec<Vec<(f64, f64)>>) {
    assert_eq!(&b[..2], b"GP");
    assert_eq!(b[2], 0, "version");
    let flags = b[3];
    assert_eq!(flags & 1, 1, "little-endian header");
    let envelope = [0usize, 32, 48, 48, 64][((flags >> 1) & 7) as usize];
    let srs = i32::from_le_bytes(b[4..8].try_into().unwrap());
    let mut at = 8 + envelope;
    assert_eq!(b[at], 1, "WKB little-endian");
    let u32_at = |i: usize| u32::from_le_bytes(b[i..i + 4].try_into().unwrap()) as usize;
    let f64_at = |i: usize| f64::from_le_bytes(b[i..i + 8].try_into().unwrap());
    assert_eq!(u32_at(at + 1), 3, "WKB Polygon");
    let rings = u32_at(at + 5);
    at += 9;
    let mut out = Vec::new();
    for _ in 0..rings {
        let n = u32_at(at);
        at += 4;
        out.push(
            (0..n)
                .map(|k| (f64_at(at + 16 * k), f64_at(at + 16 * k + 8)))
                .collect(),
        );
        at += 16 * n;
    }
    assert_eq!(at, b.len());
    (srs, out)
}

#[test]
fn polygons_hold_the_rasters_areas_in_both_formats() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (w, h) = (160u32, 120u32);
    let (_, data) = river_valley(w, h);
    let scene = d.join("valley.tif");
    write_scene_u16(&scene, w, h, &data, 10.0, &GEOKEYS, Some("0"));
    let out = d.join("classes");
    let o = run(&["landcover", s(&scene), "-k", "5", "-o", s(&out)], &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    let labels = d.join("labels.csv");
    std::fs::write(
        &labels,
        "class,label\n1,one\n2,two\n3,three\n4,two\n5,five\n",
    )
    .unwrap();
    let map = d.join("map");
    let classes = out.join("valley.classes.tif");
    let o = run(
        &[
            "landcover-label",
            s(&classes),
            "--labels",
            s(&labels),
            "--min-unit",
            "0.04ha",
            "--polygons",
            "geojson,gpkg",
            "-o",
            s(&map),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let (_, _, labelled) = read_u8_tiff(&map.join("valley.labelled.tif"));
    let mut pixels: BTreeMap<u8, u64> = BTreeMap::new();
    labelled
        .iter()
        .filter(|&&v| v > 0)
        .for_each(|&v| *pixels.entry(v).or_default() += 1);
    let names = ["", "one", "two", "three", "five"];

    // GeoPackage: planar area of the rings in UTM metres = pixels × 100 m² per label.
    let db = rusqlite::Connection::open(map.join("valley.patches.gpkg")).unwrap();
    let app: i64 = db
        .query_row("PRAGMA application_id", [], |r| r.get(0))
        .unwrap();
    assert_eq!(app, 0x4750_4B47, "application_id 'GPKG'");
    let (kind, srs): (String, i64) = db
        .query_row(
            "SELECT data_type, srs_id FROM gpkg_contents WHERE table_name = 'patches'",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    assert_eq!((kind.as_str(), srs), ("features", 32633));
    let geom_type: String = db
        .query_row(
            "SELECT geometry_type_name FROM gpkg_geometry_columns WHERE table_name = 'patches'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(geom_type, "POLYGON");
    let mut stmt = db
        .prepare("SELECT geom, class, label, area_m2, mean_uncertainty FROM patches")
        .unwrap();
    let mut planar: BTreeMap<u8, f64> = BTreeMap::new();
    let mut gpkg_area_attr: BTreeMap<u8, f64> = BTreeMap::new();
    let rows = stmt
        .query_map([], |r| {
            Ok((
                r.get::<_, Vec<u8>>(0)?,
                r.get::<_, i64>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, f64>(3)?,
                r.get::<_, Option<f64>>(4)?,
            ))
        })
        .unwrap();
    let mut features = 0;
    for row in rows {
        let (blob, class, label, area, unc) = row.unwrap();
        let (srs, rings) = read_gpkg_polygon(&blob);
        assert_eq!(srs, 32633);
        assert_eq!(label, names[class as usize]);
        let u = unc.expect("the uncertainty raster beside the classes is used");
        assert!((0.0..=1.0).contains(&u));
        let a: f64 = signed_area(&rings[0]).abs()
            - rings[1..].iter().map(|r| signed_area(r).abs()).sum::<f64>();
        *planar.entry(class as u8).or_default() += a;
        *gpkg_area_attr.entry(class as u8).or_default() += area;
        features += 1;
    }
    assert!(features >= 5);
    for (&c, &n) in &pixels {
        let raster = n as f64 * 100.0;
        let got = planar[&c];
        assert!(
            (got - raster).abs() <= 1e-3 * raster,
            "label {c}: {got} m² vs {raster} m²"
        );
    }

    // GeoJSON: RFC 7946 orientation, geodesic area on WGS 84 per label against the ground
    // areas of the pixels (the CRS module's per-pixel areas).
    let gj: Value =
        serde_json::from_slice(&std::fs::read(map.join("valley.patches.geojson")).unwrap())
            .unwrap();
    assert_eq!(gj["type"], "FeatureCollection");
    let geod = Geodesic::wgs84();
    let mut geodesic: BTreeMap<u8, f64> = BTreeMap::new();
    let mut attr: BTreeMap<u8, f64> = BTreeMap::new();
    for f in gj["features"].as_array().unwrap() {
        assert_eq!(f["geometry"]["type"], "Polygon");
        let class = f["properties"]["class"].as_u64().unwrap() as u8;
        *attr.entry(class).or_default() += f["properties"]["area_m2"].as_f64().unwrap();
        let mut total = 0.0;
        for (k, ring) in f["geometry"]["coordinates"]
            .as_array()
            .unwrap()
            .iter()
            .enumerate()
        {
            let pts: Vec<(f64, f64)> = ring
                .as_array()
                .unwrap()
                .iter()
                .map(|p| (p[0].as_f64().unwrap(), p[1].as_f64().unwrap()))
                .collect();
            assert_eq!(pts.first(), pts.last(), "closed ring");
            let ccw = signed_area(&pts) > 0.0;
            assert_eq!(
                ccw,
                k == 0,
                "RFC 7946: outer rings counterclockwise, holes clockwise"
            );
            let mut pa = PolygonArea::new(&geod, Winding::CounterClockwise);
            for &(lon, lat) in &pts[..pts.len() - 1] {
                pa.add_point(lat, lon);
            }
            let (_, area, _) = pa.compute(true);
            total += if k == 0 { area.abs() } else { -area.abs() };
        }
        *geodesic.entry(class).or_default() += total;
    }
    for &c in pixels.keys() {
        let (g, a) = (geodesic[&c], attr[&c]);
        assert!(
            (g - a).abs() <= 1e-3 * a,
            "label {c}: polygons {g} m², pixels {a} m²"
        );
        assert!((gpkg_area_attr[&c] - a).abs() <= 1e-6 * a);
    }
}
