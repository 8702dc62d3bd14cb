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
"""
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
print("wrote", sorted(p.name for p in out.iterdir()))
