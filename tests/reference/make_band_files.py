#!/usr/bin/env python3
"""One file per band, as many sensors ship a scene: the four bands of
``fixtures/rasters/utm_u16_4band_strips.tif`` written by GDAL (through rasterio) as four
single-band GeoTIFFs on the same grid, each with another layout, plus a band stack list and
one band on a shifted grid (to be refused).

Run from the repository root:

    python3 tests/reference/make_band_files.py

Needs numpy and rasterio. Writes ``fixtures/rasters/bands/``:

- ``B1.tif`` 8-row strips, uncompressed; ``B2.tif`` 16 x 16 tiles, Deflate;
  ``B3.tif`` strips, LZW; ``B4.tif`` 16 x 16 tiles, ZSTD. Same size, transform, CRS and
  nodata (0) as the source.
- ``scene.stack``: the list ``B1.tif`` .. ``B4.tif``.
- ``B4_shifted.tif`` and ``shifted.stack``: band 4 with the origin moved by one pixel.
- ``hyper_256.tif``: 256 bands of u16 (band-interleaved, Deflate), 8 x 6 pixels: the left
  half one invented spectrum, the right half another, plus a small deterministic ripple;
  ``hyper_256.json`` holds each half's mean of every band as numpy computes it.
  ``hyper_257.tif``: the same with one band more (over the supported 256).
"""
import json
import pathlib

import numpy as np
import rasterio
from rasterio.transform import Affine

src = pathlib.Path("fixtures/rasters/utm_u16_4band_strips.tif")
out = pathlib.Path("fixtures/rasters/bands")
out.mkdir(parents=True, exist_ok=True)

layouts = {
    "B1": dict(blockysize=8),
    "B2": dict(tiled=True, blockxsize=16, blockysize=16, compress="deflate"),
    "B3": dict(blockysize=8, compress="lzw"),
    "B4": dict(tiled=True, blockxsize=16, blockysize=16, compress="zstd"),
}

with rasterio.open(src) as s:
    data = s.read()
    profile = dict(
        driver="GTiff",
        width=s.width,
        height=s.height,
        count=1,
        dtype=data.dtype,
        crs=s.crs,
        transform=s.transform,
        nodata=0,
    )

for i, (name, layout) in enumerate(layouts.items()):
    with rasterio.open(out / f"{name}.tif", "w", **profile, **layout) as d:
        d.write(data[i], 1)
    with rasterio.open(out / f"{name}.tif") as d:
        assert np.array_equal(d.read(1), data[i]), name

t = profile["transform"]
shifted = dict(profile, transform=t * Affine.translation(1, 0))
with rasterio.open(out / "B4_shifted.tif", "w", **shifted, blockysize=8) as d:
    d.write(data[3], 1)

(out / "scene.stack").write_text(
    "# four single-band files of one scene, in band order\nB1.tif\nB2.tif\nB3.tif\nB4.tif\n"
)
(out / "shifted.stack").write_text("B1.tif\nB2.tif\nB3.tif\nB4_shifted.tif\n")
def hyper(bands):
    x = np.arange(8)[None, None, :]
    y = np.arange(6)[None, :, None]
    b = np.arange(bands)[:, None, None]
    left = 1000 + 20 * b
    right = 6000 - 15 * b
    ripple = (3 * x + 5 * y + b) % 7
    return np.where(x < 4, left, right).astype(np.uint16) + ripple.astype(np.uint16)


for bands in (256, 257):
    data = hyper(bands)
    prof = dict(profile, count=bands, width=8, height=6, interleave="band", compress="deflate")
    with rasterio.open(out / f"hyper_{bands}.tif", "w", **prof) as d:
        d.write(data)
    with rasterio.open(out / f"hyper_{bands}.tif") as d:
        assert d.count == bands and np.array_equal(d.read(), data)
    if bands == 256:
        means = {
            "left": data[:, :, :4].reshape(bands, -1).mean(axis=1).tolist(),
            "right": data[:, :, 4:].reshape(bands, -1).mean(axis=1).tolist(),
        }
        (out / "hyper_256.json").write_text(json.dumps(means) + "\n")

print("wrote", sorted(p.name for p in out.iterdir()))
