//! Writing patches as vector files: GeoJSON (RFC 7946: longitude/latitude on WGS 84,
//! outer rings counterclockwise, holes clockwise) and GeoPackage (OGC 12-128r18: an SQLite
//! file with the `gpkg_*` tables and one feature table, geometries as GeoPackageBinary
//! headers followed by WKB polygons) in the raster's own CRS.

use super::polygons::Patch;
use crate::error::{Error, Result};
use crate::raster::geotiff::{GridCrs, PixelToModel};
use serde_json::json;
use std::path::Path;

/// What each polygon carries besides its geometry.
#[derive(Debug, Clone, PartialEq)]
pub struct PatchAttributes {
    /// Label number and name.
    pub class: u8,
    pub label: String,
    /// Ground area in square metres (`None` when the CRS gives none).
    pub area_m2: Option<f64>,
    /// Mean of the uncertainty raster over the patch (`None` without one).
    pub mean_uncertainty: Option<f64>,
}

fn signed_area(ring: &[(f64, f64)]) -> f64 {
    ring.windows(2)
        .map(|s| s[0].0 * s[1].1 - s[1].0 * s[0].1)
        .sum::<f64>()
        / 2.0
}

/// The rings of a patch through `f`, outer ring counterclockwise and holes clockwise in the
/// output coordinates (x east, y north).
fn rings_through(
    patch: &Patch,
    f: &dyn Fn(f64, f64) -> Option<(f64, f64)>,
) -> Option<Vec<Vec<(f64, f64)>>> {
    let mut out = Vec::with_capacity(patch.rings.len());
    for (k, ring) in patch.rings.iter().enumerate() {
        let mut r: Vec<(f64, f64)> = ring
            .iter()
            .map(|&(x, y)| f(x as f64, y as f64))
            .collect::<Option<_>>()?;
        let ccw = signed_area(&r) > 0.0;
        if ccw != (k == 0) {
            r.reverse();
        }
        out.push(r);
    }
    Some(out)
}

/// The GeoJSON FeatureCollection of `patches`. Refused (naming `raster`) when pixel corners
/// cannot be put in longitude/latitude, or when the CRS's datum is not one that may be
/// written as WGS 84 without a datum shift.
pub fn geojson(
    raster: &Path,
    grid: &GridCrs,
    patches: &[Patch],
    attrs: &[PatchAttributes],
) -> Result<String> {
    let refuse = |m: String| Error::InputData {
        path: raster.into(),
        message: m,
    };
    match grid.crs.ellipsoid().map(|e| e.name) {
        Some("WGS 84") | Some("GRS 1980") => {}
        Some(other) => {
            return Err(refuse(format!(
                "its CRS ({}) is on the {other} ellipsoid; GeoJSON needs WGS 84 and no datum \
                 shift is made here, so write the GeoPackage instead",
                grid.crs.describe()
            )))
        }
        None => {
            return Err(refuse(format!(
                "its pixels cannot be placed in longitude and latitude ({}), as GeoJSON needs",
                grid.crs.describe()
            )))
        }
    }
    let to_ll = |x: f64, y: f64| grid.pixel_to_lonlat(x, y);
    let mut features = Vec::with_capacity(patches.len());
    for (p, a) in patches.iter().zip(attrs) {
        let rings = rings_through(p, &to_ll)
            .ok_or_else(|| refuse("a pixel corner has no longitude and latitude".into()))?;
        let coords: Vec<Vec<[f64; 2]>> = rings
            .iter()
            .map(|r| {
                r.iter()
                    .map(|&(lon, lat)| [round7(lon), round7(lat)])
                    .collect()
            })
            .collect();
        features.push(json!({
            "type": "Feature",
            "properties": {
                "class": a.class,
                "label": a.label,
                "area_m2": a.area_m2,
                "mean_uncertainty": a.mean_uncertainty,
            },
            "geometry": { "type": "Polygon", "coordinates": coords },
        }));
    }
    let doc = json!({ "type": "FeatureCollection", "features": features });
    Ok(format!(
        "{}\n",
        serde_json::to_string(&doc).expect("serialises")
    ))
}

/// Seven decimals of a degree: about a centimetre.
fn round7(v: f64) -> f64 {
    (v * 1e7).round() / 1e7
}

/// GeoPackageBinary: header (magic, version 0, flags: little-endian, xy envelope), the SRS
/// id, the envelope (min x, max x, min y, max y), then the WKB polygon (little-endian).
pub fn gpkg_geometry(rings: &[Vec<(f64, f64)>], srs_id: i32) -> Vec<u8> {
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &(x, y) in rings.iter().flatten() {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let mut b = Vec::with_capacity(48 + 9 + rings.iter().map(|r| 4 + 16 * r.len()).sum::<usize>());
    b.extend_from_slice(b"GP");
    b.push(0); // version 1.0
    b.push(0b0000_0011); // envelope [minx, maxx, miny, maxy], little-endian
    b.extend_from_slice(&srs_id.to_le_bytes());
    for v in [x0, x1, y0, y1] {
        b.extend_from_slice(&v.to_le_bytes());
    }
    b.push(1); // WKB little-endian
    b.extend_from_slice(&3u32.to_le_bytes()); // Polygon
    b.extend_from_slice(&(rings.len() as u32).to_le_bytes());
    for r in rings {
        b.extend_from_slice(&(r.len() as u32).to_le_bytes());
        for &(x, y) in r {
            b.extend_from_slice(&x.to_le_bytes());
            b.extend_from_slice(&y.to_le_bytes());
        }
    }
    b
}

/// The table name of the features.
pub const GPKG_TABLE: &str = "patches";

/// Writes a GeoPackage of `patches` in the raster's CRS to `path` (a new file).
pub fn write_geopackage(
    path: &Path,
    raster: &Path,
    grid: &GridCrs,
    patches: &[Patch],
    attrs: &[PatchAttributes],
) -> Result<()> {
    let transform: PixelToModel = grid.transform.ok_or_else(|| Error::InputData {
        path: raster.into(),
        message: "has no georeferencing to place polygons with".into(),
    })?;
    let sql = |e: rusqlite::Error| Error::Output {
        path: path.into(),
        message: format!("GeoPackage: {e}"),
    };
    let mut db = rusqlite::Connection::open(path).map_err(sql)?;
    let (srs_id, org, org_id, name) = match grid.crs.epsg() {
        Some(code) => (code as i32, "EPSG", code as i32, grid.crs.describe()),
        None => (-1, "NONE", -1, "undefined Cartesian SRS".to_string()),
    };
    let tx = db.transaction().map_err(sql)?;
    tx.execute_batch(&format!(
        "PRAGMA application_id = 1196444487; PRAGMA user_version = 10400;
         CREATE TABLE gpkg_spatial_ref_sys (srs_name TEXT NOT NULL, srs_id INTEGER PRIMARY KEY,
           organization TEXT NOT NULL, organization_coordsys_id INTEGER NOT NULL,
           definition TEXT NOT NULL, description TEXT);
         INSERT INTO gpkg_spatial_ref_sys VALUES
           ('Undefined Cartesian SRS', -1, 'NONE', -1, 'undefined', 'undefined Cartesian coordinate reference system'),
           ('Undefined geographic SRS', 0, 'NONE', 0, 'undefined', 'undefined geographic coordinate reference system'),
           ('WGS 84 geodetic', 4326, 'EPSG', 4326, 'GEOGCS[\"WGS 84\",DATUM[\"WGS_1984\",SPHEROID[\"WGS 84\",6378137,298.257223563,AUTHORITY[\"EPSG\",\"7030\"]],AUTHORITY[\"EPSG\",\"6326\"]],PRIMEM[\"Greenwich\",0,AUTHORITY[\"EPSG\",\"8901\"]],UNIT[\"degree\",0.0174532925199433,AUTHORITY[\"EPSG\",\"9122\"]],AUTHORITY[\"EPSG\",\"4326\"]]', 'longitude/latitude coordinates in decimal degrees on the WGS 84 spheroid');
         CREATE TABLE gpkg_contents (table_name TEXT NOT NULL PRIMARY KEY, data_type TEXT NOT NULL,
           identifier TEXT UNIQUE, description TEXT DEFAULT '',
           last_change DATETIME NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')),
           min_x DOUBLE, min_y DOUBLE, max_x DOUBLE, max_y DOUBLE, srs_id INTEGER,
           CONSTRAINT fk_gc_r_srs_id FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys(srs_id));
         CREATE TABLE gpkg_geometry_columns (table_name TEXT NOT NULL, column_name TEXT NOT NULL,
           geometry_type_name TEXT NOT NULL, srs_id INTEGER NOT NULL, z TINYINT NOT NULL, m TINYINT NOT NULL,
           CONSTRAINT pk_geom_cols PRIMARY KEY (table_name, column_name),
           CONSTRAINT fk_gc_tn FOREIGN KEY (table_name) REFERENCES gpkg_contents(table_name),
           CONSTRAINT fk_gc_srs FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys (srs_id));
         CREATE TABLE {GPKG_TABLE} (fid INTEGER PRIMARY KEY AUTOINCREMENT NOT NULL, geom POLYGON,
           class INTEGER NOT NULL, label TEXT NOT NULL, area_m2 DOUBLE, mean_uncertainty DOUBLE);"
    ))
    .map_err(sql)?;
    if srs_id > 0 && srs_id != 4326 {
        tx.execute(
            "INSERT INTO gpkg_spatial_ref_sys VALUES (?1, ?2, ?3, ?4, 'undefined', ?5)",
            rusqlite::params![
                name,
                srs_id,
                org,
                org_id,
                "definition: see the EPSG registry"
            ],
        )
        .map_err(sql)?;
    }
    let to_model = |x: f64, y: f64| Some(transform.apply(x, y));
    let (mut x0, mut y0, mut x1, mut y1) = (f64::MAX, f64::MAX, f64::MIN, f64::MIN);
    {
        let mut ins = tx
            .prepare(&format!(
                "INSERT INTO {GPKG_TABLE} (geom, class, label, area_m2, mean_uncertainty) VALUES (?1, ?2, ?3, ?4, ?5)"
            ))
            .map_err(sql)?;
        for (p, a) in patches.iter().zip(attrs) {
            let rings = rings_through(p, &to_model).expect("affine always maps");
            for &(x, y) in &rings[0] {
                x0 = x0.min(x);
                x1 = x1.max(x);
                y0 = y0.min(y);
                y1 = y1.max(y);
            }
            ins.execute(rusqlite::params![
                gpkg_geometry(&rings, srs_id),
                a.class,
                a.label,
                a.area_m2,
                a.mean_uncertainty
            ])
            .map_err(sql)?;
        }
    }
    tx.execute(
        "INSERT INTO gpkg_contents (table_name, data_type, identifier, description, min_x, min_y, max_x, max_y, srs_id)
         VALUES (?1, 'features', ?1, 'land-cover patches', ?2, ?3, ?4, ?5, ?6)",
        rusqlite::params![GPKG_TABLE, x0, y0, x1, y1, srs_id],
    )
    .map_err(sql)?;
    tx.execute(
        "INSERT INTO gpkg_geometry_columns VALUES (?1, 'geom', 'POLYGON', ?2, 0, 0)",
        rusqlite::params![GPKG_TABLE, srs_id],
    )
    .map_err(sql)?;
    tx.commit().map_err(sql)?;
    Ok(())
}
