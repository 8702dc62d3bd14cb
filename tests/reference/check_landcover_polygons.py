"""Reads chromasift's land-cover polygons with GDAL's vector reader (pyogrio), shapely and
pyproj, independent of our writer, and checks them against the class raster.

    cargo build
    python3 tests/reference/check_landcover_polygons.py [path/to/chromasift]

It runs `landcover -k 5` on fixtures/rasters/utm_u16_4band_strips.tif, then
`landcover-label --min-unit 3px --polygons geojson,gpkg`, and checks:
- pyogrio (GDAL) opens the GeoPackage: layer `patches`, CRS EPSG:32633, fields class, label,
  area_m2, mean_uncertainty; every geometry is a valid polygon (shapely `is_valid`);
- per label, the shapely area of the GeoPackage polygons equals pixels × pixel area of the
  labelled raster (read with tifffile) within 0.1 %;
- pyogrio opens the GeoJSON (CRS EPSG:4326); per label, the geodesic area of its polygons
  (pyproj `Geod(ellps="WGS84").geometry_area_perimeter`) equals the sum of `area_m2`
  within 0.1 %, and every polygon is valid.
Prints one line per check and exits non-zero on any failure. Not part of `cargo test`.
"""
import os
import subprocess
import sys
import tempfile

import numpy as np
import pyogrio
import pyproj
import shapely
import tifffile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = sys.argv[1] if len(sys.argv) > 1 else os.path.join(ROOT, "target", "debug", "chromasift")
SCENE = os.path.join(ROOT, "fixtures", "rasters", "utm_u16_4band_strips.tif")


def main():
    failures = 0

    def check(ok, what):
        nonlocal failures
        print(f"{'ok  ' if ok else 'FAIL'} {what}")
        failures += not ok

    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([BIN, "landcover", SCENE, "-k", "5", "-o", tmp], check=True)
        classes = os.path.join(tmp, "utm_u16_4band_strips.classes.tif")
        subprocess.run([BIN, "landcover-label", classes, "--min-unit", "3px",
                        "--polygons", "geojson,gpkg", "-o", tmp], check=True)
        labelled = tifffile.imread(os.path.join(tmp, "utm_u16_4band_strips.labelled.tif"))
        with tifffile.TiffFile(classes) as tf:
            sx, sy = tf.pages[0].tags[33550].value[:2]
        pixel_area = sx * sy
        gpkg = os.path.join(tmp, "utm_u16_4band_strips.patches.gpkg")
        info = pyogrio.read_info(gpkg)
        check(pyogrio.list_layers(gpkg)[0][0] == "patches", "GeoPackage layer 'patches'")
        check(info["crs"] == "EPSG:32633", f"GeoPackage CRS {info['crs']}")
        check(set(["class", "label", "area_m2", "mean_uncertainty"]) <= set(info["fields"]), "fields")
        meta, _, geoms, fields = pyogrio.raw.read(gpkg)
        shapes = shapely.from_wkb(geoms)
        check(bool(np.all(shapely.is_valid(shapes))), f"{len(shapes)} GeoPackage polygons valid")
        cls = fields[meta["fields"].tolist().index("class")]
        for c in sorted(set(labelled.ravel()) - {0}):
            want = (labelled == c).sum() * pixel_area
            got = shapely.area(shapes[cls == c]).sum()
            check(abs(got - want) <= 1e-3 * want, f"label {c}: polygons {got:.1f} m², raster {want:.1f} m²")
        gj = os.path.join(tmp, "utm_u16_4band_strips.patches.geojson")
        info = pyogrio.read_info(gj)
        check(info["crs"] == "EPSG:4326", f"GeoJSON CRS {info['crs']}")
        meta, _, geoms, fields = pyogrio.raw.read(gj)
        shapes = shapely.from_wkb(geoms)
        check(bool(np.all(shapely.is_valid(shapes))), f"{len(shapes)} GeoJSON polygons valid")
        names = meta["fields"].tolist()
        cls, area = fields[names.index("class")], fields[names.index("area_m2")]
        geod = pyproj.Geod(ellps="WGS84")
        for c in sorted(set(cls)):
            got = sum(abs(geod.geometry_area_perimeter(g)[0]) for g in shapes[cls == c])
            want = area[cls == c].sum()
            check(abs(got - want) <= 1e-3 * want, f"label {c}: geodesic {got:.1f} m², area_m2 {want:.1f} m²")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
