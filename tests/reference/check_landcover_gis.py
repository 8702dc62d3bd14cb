"""Reads chromasift's land-cover rasters with GDAL (through rasterio) as a GIS would.

    cargo build            # or --release; CHROMASIFT_BIN=path picks the binary
    python3 tests/reference/check_landcover_gis.py

Runs `chromasift landcover` on fixtures/rasters/gdal/scale_offset.tif, once as is and once
with BigTIFF forced (CHROMASIFT_BIGTIFF_ABOVE=1000), and on a 1100 x 900 scene this script
writes with GDAL (larger than a tile, so the rasters get overviews). Checks with rasterio:
- both rasters open, with the input's CRS, transform and size;
- the class raster is uint8, palette colour interpretation, with a colour map whose entries
  1..K are the document's class colours and entry 0 black; DEFLATE compression;
- the uncertainty raster is float32, DEFLATE, nodata -1 exactly where the classes are 0;
- the forced run writes BigTIFF (GDAL's "BigTIFF" flag via the file header) with the same
  pixel values;
- both rasters are tiled in 256 x 256 blocks, with GDAL's PREDICTOR 2 (classes) or 3
  (uncertainty) in the IMAGE_STRUCTURE metadata;
- on the large scene: overviews 2, 4, 8 (halving until one tile holds the level), each
  opened by GDAL (OVERVIEW_LEVEL) with the colour map and nodata, and equal to the 2 x 2
  reduction of the level above computed here with numpy (most frequent class other than 0,
  first in reading order on a tie; mean of the values other than -1);
- the Cloud-Optimized layout, from the offsets GDAL reports (TIFF metadata domain:
  IFD_OFFSET, BLOCK_OFFSET_x_y): the first directory right after the header (8, or 16 for
  BigTIFF), the overviews' directories after it in order, every directory before the first
  tile, tiles of the smallest overview first and of the full resolution last, row-major
  within a level. GDAL's own validator (osgeo_utils) is used as well when it is installed,
  and rio-cogeo's cog_validate (pip install rio-cogeo) on the large scene's rasters.
Prints one line per check and exits non-zero on any failure.
"""
import json
import os
import subprocess
import sys
import tempfile

try:  # rio-cogeo (PyPI): a port of GDAL's validate_cloud_optimized_geotiff, optional
    from rio_cogeo.cogeo import cog_validate
except ImportError:
    cog_validate = None

import numpy as np
import rasterio
from rasterio.transform import from_origin

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.environ.get("CHROMASIFT_BIN", os.path.join(ROOT, "target", "debug", "chromasift"))
SCENE = os.path.join(ROOT, "fixtures", "rasters", "gdal", "scale_offset.tif")


def run(scene, out, k, env=None):
    e = dict(os.environ)
    e.update(env or {})
    subprocess.run([BIN, "landcover", scene, "-k", str(k), "-o", out], check=True, env=e,
                   capture_output=True)
    stem = os.path.splitext(os.path.basename(scene))[0]
    with open(os.path.join(out, stem + ".classes.json")) as f:
        return json.load(f)


def large_scene(path):
    """A 1100 x 900 four-band uint16 UTM scene with a nodata band of rows at the top."""
    w, h = 1100, 900
    yy, xx = np.mgrid[0:h, 0:w]
    bands = np.stack([
        (1000 + 500 * np.sin(xx / 40.0 + k) + 400 * np.cos(yy / 55.0 * (k + 1))
         + (xx * yy) % 97).astype("uint16") for k in range(4)])
    bands[:, :10, :] = 0
    with rasterio.open(path, "w", driver="GTiff", width=w, height=h, count=4, dtype="uint16",
                       crs="EPSG:32633", transform=from_origin(500000, 5000000, 10, 10),
                       nodata=0) as d:
        d.write(bands)


def reduce(v, classes, nodata):
    """The 2 x 2 reduction of one level, from its definition."""
    h, w = v.shape
    out = np.empty(((h + 1) // 2, (w + 1) // 2), dtype=np.float64)
    for y in range(out.shape[0]):
        for x in range(out.shape[1]):
            block = v[2 * y:2 * y + 2, 2 * x:2 * x + 2].ravel()
            valid = block[block != nodata]
            if valid.size == 0:
                out[y, x] = nodata
            elif classes:
                counts = [(int((valid == c).sum()), -i, c) for i, c in enumerate(valid)]
                out[y, x] = max(counts)[2]
            else:
                out[y, x] = valid.astype(np.float64).mean()
    return out


def layout(path, check, label):
    """The Cloud-Optimized order of directories and tiles, from GDAL's TIFF metadata."""
    with rasterio.open(path) as r:
        with open(path, "rb") as f:
            big = f.read(4)[2] == 43
        ovr = r.overviews(1)
        ifds = [int(r.get_tag_item("IFD_OFFSET", "TIFF", bidx=1))]
        ifds += [int(r.get_tag_item("IFD_OFFSET", "TIFF", bidx=1, ovr=i)) for i in range(len(ovr))]
        check(ifds[0] == (16 if big else 8), f"{label}: first directory at byte {ifds[0]}")
        check(ifds == sorted(ifds), f"{label}: directories in order {ifds}")
        levels = []  # per level, the offsets of its tiles in row-major order
        for i in [None] + list(range(len(ovr))):
            if i is None:
                w, h = r.width, r.height
            else:
                with rasterio.open(path, overview_level=i) as o:
                    w, h = o.width, o.height
            offs = []
            for ty in range((h + 255) // 256):
                for tx in range((w + 255) // 256):
                    kw = {"bidx": 1} if i is None else {"bidx": 1, "ovr": i}
                    offs.append(int(r.get_tag_item(f"BLOCK_OFFSET_{tx}_{ty}", "TIFF", **kw)))
            levels.append(offs)
        first = min(min(o) for o in levels)
        check(max(ifds) < first, f"{label}: every directory before the first tile ({first})")
        check(all(o == sorted(o) for o in levels), f"{label}: tiles row-major in every level")
        starts = [o[0] for o in levels]
        check(starts == sorted(starts, reverse=True),
              f"{label}: smallest overview's tiles first, full resolution last {starts}")
    try:
        from osgeo_utils.samples import validate_cloud_optimized_geotiff as v
    except ImportError:
        return
    warnings, errors, _ = v.validate(path, full_check=True)
    check(not errors, f"{label}: GDAL's validator: {errors or 'no error'}")


def main():
    failures = 0

    def check(ok, what):
        nonlocal failures
        print(("ok    " if ok else "FAIL  ") + what)
        failures += not ok

    with tempfile.TemporaryDirectory() as tmp, rasterio.open(SCENE) as src:
        results = {}
        for name, env in [("classic", None), ("bigtiff", {"CHROMASIFT_BIGTIFF_ABOVE": "1000"})]:
            out = os.path.join(tmp, name)
            doc = run(SCENE, out, 4, env)
            cls_path = os.path.join(out, "scale_offset.classes.tif")
            unc_path = os.path.join(out, "scale_offset.uncertainty.tif")
            with rasterio.open(cls_path) as c, rasterio.open(unc_path) as u:
                for r, label, pred in [(c, "classes", "2"), (u, "uncertainty", "3")]:
                    check(r.crs == src.crs and r.transform == src.transform
                          and (r.width, r.height) == (src.width, src.height),
                          f"{name} {label}: CRS, transform and size of the input")
                    check(r.compression is not None and r.compression.name.lower() == "deflate",
                          f"{name} {label}: DEFLATE ({r.compression})")
                    check(r.is_tiled and r.block_shapes == [(256, 256)]
                          and r.tags(ns="IMAGE_STRUCTURE").get("PREDICTOR") == pred,
                          f"{name} {label}: 256 x 256 tiles, predictor {pred}")
                cmap = c.colormap(1)
                check(c.dtypes[0] == "uint8" and c.colorinterp[0].name == "palette",
                      f"{name} classes: uint8 with a palette")
                want = {cl["class"]: tuple(int(cl["hex"][i:i + 2], 16) for i in (1, 3, 5))
                        for cl in doc["classes"]}
                check(all(cmap[k][:3] == v for k, v in want.items()) and cmap[0][:3] == (0, 0, 0),
                      f"{name} classes: colour map = preview colours, 0 black")
                classes, unc = c.read(1), u.read(1)
                check(u.dtypes[0] == "float32" and u.nodata == -1.0
                      and bool(((unc == -1.0) == (classes == 0)).all()),
                      f"{name} uncertainty: float32, -1 exactly where classes are 0")
                results[name] = (classes, unc)
            with open(cls_path, "rb") as f:
                head = f.read(4)
            check((head[2] == 43) == (name == "bigtiff"), f"{name}: header {head!r}")
            layout(cls_path, check, f"{name} classes")
        check(all((a == b).all() for a, b in zip(results["classic"], results["bigtiff"])),
              "BigTIFF and classic outputs hold the same pixels")

        scene = os.path.join(tmp, "large.tif")
        large_scene(scene)
        out = os.path.join(tmp, "large")
        doc = run(scene, out, 5)
        want = {cl["class"]: tuple(int(cl["hex"][i:i + 2], 16) for i in (1, 3, 5))
                for cl in doc["classes"]}
        for stem, classes, nodata in [("classes", True, 0), ("uncertainty", False, -1)]:
            path = os.path.join(out, f"large.{stem}.tif")
            with rasterio.open(path) as r:
                ovr = r.overviews(1)
                check(ovr == [2, 4, 8], f"large {stem}: overviews {ovr}")
                check(r.is_tiled and r.block_shapes == [(256, 256)], f"large {stem}: tiled")
                above = r.read(1)
                counts = {k: int((above == k).sum()) for k in want} if classes else None
                if classes:
                    check(all(counts[cl["class"]] == cl["pixels"] for cl in doc["classes"]),
                          "large classes: pixels per class as the document counts them")
            for i in range(len(ovr)):
                with rasterio.open(path, overview_level=i) as o:
                    level = o.read(1)
                    expect = reduce(above, classes, nodata)
                    close = np.allclose(level.astype(np.float64), expect, rtol=1e-6, atol=1e-7)
                    extra = ""
                    if classes:
                        cmap = o.colormap(1)
                        close = close and all(cmap[k][:3] == v for k, v in want.items())
                        extra = " and the colour map"
                    check(close and o.nodata == nodata and o.is_tiled
                          and o.block_shapes == [(256, 256)],
                          f"large {stem}: overview {i} ({o.width} x {o.height}) is the 2 x 2 "
                          f"reduction of the level above, tiled, nodata {o.nodata}{extra}")
                    above = level
            layout(path, check, f"large {stem}")
            if cog_validate is not None:
                valid, errors, warnings = cog_validate(path, quiet=True)
                check(valid and not errors,
                      f"large {stem}: rio-cogeo's cog_validate (GDAL's COG rules): "
                      f"valid {valid}, errors {errors}, warnings {warnings}")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
