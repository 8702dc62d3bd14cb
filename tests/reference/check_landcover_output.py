"""Reads chromasift's land-cover outputs with tifffile (an independent TIFF reader) and
checks that they line up with the input on the map.

    cargo build --release  # CHROMASIFT_BIN=path picks another binary
    python3 tests/reference/check_landcover_output.py

The uncertainty raster uses the floating-point predictor (3), which tifffile decodes through
the `imagecodecs` package (`pip install imagecodecs`).

It runs `chromasift landcover` on fixtures/rasters/utm_u16_4band_strips.tif and checks:
- the GeoTIFF tags (ModelPixelScale 33550, ModelTiepoint 33922, ModelTransformation 34264,
  GeoKeyDirectory 34735, GeoDoubleParams 34736, GeoAsciiParams 34737) of both output rasters
  equal the input's, tag by tag and value by value;
- the class raster is uint8 with the input's height and width, with classes 0..K;
- the uncertainty raster is float32 in 0..1, and it holds -1 exactly where the class raster is 0;
- tifffile's own geotiff_metadata reads the same model from the input and the outputs.
Prints one line per check and exits non-zero on any failure.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import tifffile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.environ.get("CHROMASIFT_BIN", os.path.join(ROOT, "target", "release", "chromasift"))
SCENE = os.path.join(ROOT, "fixtures", "rasters", "utm_u16_4band_strips.tif")
GEO_TAGS = [33550, 33922, 34264, 34735, 34736, 34737]


def tags_of(path):
    with tifffile.TiffFile(path) as tf:
        page = tf.pages[0]
        out = {}
        for code in GEO_TAGS:
            t = page.tags.get(code)
            if t is not None:
                v = t.value
                out[code] = (t.dtype, tuple(v) if isinstance(v, (tuple, list, np.ndarray)) else v)
        return out, tf.geotiff_metadata


def main():
    failures = 0
    with tempfile.TemporaryDirectory() as out:
        subprocess.run([BIN, "landcover", SCENE, "-k", "4", "-o", out], check=True)
        stem = "utm_u16_4band_strips"
        src_tags, src_meta = tags_of(SCENE)
        for name in ("classes", "uncertainty"):
            tags, meta = tags_of(os.path.join(out, f"{stem}.{name}.tif"))
            ok = tags == src_tags and meta == src_meta
            print(f"{'ok  ' if ok else 'FAIL'} {name}.tif GeoTIFF tags equal the input's ({len(tags)} tags)")
            failures += not ok
        src = tifffile.imread(SCENE)
        classes = tifffile.imread(os.path.join(out, f"{stem}.classes.tif"))
        unc = tifffile.imread(os.path.join(out, f"{stem}.uncertainty.tif"))
        doc = json.load(open(os.path.join(out, f"{stem}.classes.json")))
        checks = [
            ("class raster is uint8 of the scene's size", classes.dtype == np.uint8 and classes.shape == src.shape[:2]),
            ("classes are 0..K", classes.max() <= doc["k"] and classes.min() >= 0),
            ("uncertainty is float32 in 0..1 or -1", unc.dtype == np.float32 and bool(np.all((unc == -1) | ((unc >= 0) & (unc <= 1))))),
            ("uncertainty is -1 exactly at class 0", bool(np.array_equal(unc == -1, classes == 0))),
            ("class pixel counts match the document", all(int((classes == c["class"]).sum()) == c["pixels"] for c in doc["classes"])),
        ]
        for text, ok in checks:
            print(f"{'ok  ' if ok else 'FAIL'} {text}")
            failures += not ok
    print(f"tifffile {tifffile.__version__}, numpy {np.__version__}")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
