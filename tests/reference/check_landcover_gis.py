"""Reads chromasift's land-cover rasters with GDAL (through rasterio) as a GIS would.

    cargo build            # or --release; CHROMASIFT_BIN=path picks the binary
    python3 tests/reference/check_landcover_gis.py

Runs `chromasift landcover` on fixtures/rasters/gdal/scale_offset.tif, once as is and once
with BigTIFF forced (CHROMASIFT_BIGTIFF_ABOVE=1000), and checks with rasterio:
- both rasters open, with the input's CRS, transform and size;
- the class raster is uint8, palette colour interpretation, with a colour map whose entries
  1..K are the document's class colours and entry 0 black; DEFLATE compression;
- the uncertainty raster is float32, DEFLATE, nodata -1 exactly where the classes are 0;
- the forced run writes BigTIFF (GDAL's "BigTIFF" flag via the file header) with the same
  pixel values.
Prints one line per check and exits non-zero on any failure.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import rasterio

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.environ.get("CHROMASIFT_BIN", os.path.join(ROOT, "target", "debug", "chromasift"))
SCENE = os.path.join(ROOT, "fixtures", "rasters", "gdal", "scale_offset.tif")


def run(out, env=None):
    e = dict(os.environ)
    e.update(env or {})
    subprocess.run([BIN, "landcover", SCENE, "-k", "4", "-o", out], check=True, env=e,
                   capture_output=True)
    with open(os.path.join(out, "scale_offset.classes.json")) as f:
        return json.load(f)


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
            doc = run(out, env)
            cls_path = os.path.join(out, "scale_offset.classes.tif")
            unc_path = os.path.join(out, "scale_offset.uncertainty.tif")
            with rasterio.open(cls_path) as c, rasterio.open(unc_path) as u:
                for r, label in [(c, "classes"), (u, "uncertainty")]:
                    check(r.crs == src.crs and r.transform == src.transform
                          and (r.width, r.height) == (src.width, src.height),
                          f"{name} {label}: CRS, transform and size of the input")
                    check(r.compression is not None and r.compression.name.lower() == "deflate",
                          f"{name} {label}: DEFLATE ({r.compression})")
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
        check(all((a == b).all() for a, b in zip(results["classic"], results["bigtiff"])),
              "BigTIFF and classic outputs hold the same pixels")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
