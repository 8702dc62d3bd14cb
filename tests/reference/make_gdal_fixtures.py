#!/usr/bin/env python3
"""GDAL-written GeoTIFF fixtures for the reader's handling of what is not there (sparse
blocks, masks, alpha), of ZSTD, of many bands, and of scale/offset and band descriptions.

Run from the repository root:

    python3 tests/reference/make_gdal_fixtures.py

Needs numpy and rasterio (which carries GDAL).  The pixel values are invented: a
deterministic pattern, no imagery, no seeds, no clocks.  Every file is written by GDAL
through rasterio, read back with rasterio, and described in
``fixtures/rasters/gdal/expected.json``:

- ``valid``: how many pixels hold data (not in a left-out block, not masked, alpha not 0,
  not nodata) -- what the project's reader must report as data;
- ``sums``: per band, the sum over valid pixels of the value (after scale and offset when the
  file has them) in float64, and ``wsums`` the same weighted by w(y, x) = 1 + (31y + 17x)
  mod 101;
- the GDAL version, creation options, scales, offsets and band descriptions.

Files (64 x 48 pixels, WGS 84 / UTM 33N, 10 m, unless said):

sparse_{none,deflate,lzw,zstd}_tiles.tif
    4 x u16, 16 x 16 tiles, SPARSE_OK: the top-left 32 x 16 pixels and one more tile are 0
    in every band and no nodata is set, so GDAL leaves those tiles out (offset and byte
    count 0).
sparse_deflate_strips.tif
    the same as 8-row strips, Deflate.
mask_internal.tif / mask_external.tif (+ .msk)
    4 x u16 with a GDAL mask (1-bit, Deflate) inside the file, or beside it in
    ``mask_external.tif.msk``; the right quarter is masked.
alpha_rgba.tif
    u8 RGB + alpha (ExtraSamples unassociated alpha); alpha 0 over the bottom 8 rows.
alpha_4band.tif
    4 x u16 + an alpha band (colour interpretation alpha on band 5, which GDAL stores as
    ExtraSamples); alpha 0 over the left 8 columns.
zstd_20band.tif
    20 x u16, 16 x 16 tiles, ZSTD with the horizontal predictor.
scale_offset.tif
    4 x u16 with SCALE 0.0001 / OFFSET -0.1 on every band (reflectance), band
    descriptions "blue", "green", "red", "nir", nodata 0.
undefined_ndvi.tif
    4 x u16, bands 3 and 4 both 0 on an 8 x 8 block, no nodata: NDVI (3, 4) undefined there.
webmercator_scene.tif / geographic_scene.tif
    4 x u16 in EPSG 3857 (10 m pixels at 47.8 N) and EPSG 4326 (0.0001 degree pixels), with
    the geodesic area of the whole footprint from pyproj.Geod.
clouds_same_grid.tif / clouds_other_grid.tif
    1 x u8 cloud masks (1 = cloud) for scale_offset.tif: one on its grid, one shifted by
    half a pixel.
"""
import json
import os

import numpy as np
import rasterio
from rasterio.crs import CRS
from rasterio.transform import Affine

OUT = "fixtures/rasters/gdal"
W, H = 64, 48
UTM = CRS.from_epsg(32633)
T = Affine(10.0, 0.0, 500_000.0, 0.0, -10.0, 5_300_000.0)


def weight():
    y, x = np.mgrid[0:H, 0:W]
    return 1.0 + ((31 * y + 17 * x) % 101)


def base(bands=4, dtype="uint16"):
    y, x = np.mgrid[0:H, 0:W]
    out = np.stack([(1 + (x * 37 + y * 11 + b * 101) % 997) for b in range(bands)])
    if dtype == "uint8":
        out = 1 + out % 250
    return out.astype(dtype)


def sums(data, valid, scale=None, offset=None):
    w = weight()
    s, ws = [], []
    for b in range(data.shape[0]):
        v = data[b].astype(np.float64)
        if scale is not None:
            v = v * scale[b] + offset[b]
        s.append(float(v[valid].sum()))
        ws.append(float((v * w)[valid].sum()))
    return s, ws


def profile(count, dtype="uint16", **kw):
    p = dict(driver="GTiff", width=W, height=H, count=count, dtype=dtype, crs=UTM, transform=T)
    p.update(kw)
    return p


def record(entries, name, data, valid, options, **extra):
    s, ws = sums(data, valid, extra.get("scales"), extra.get("offsets"))
    size = os.path.getsize(os.path.join(OUT, name))
    assert size < 60_000, (name, size)
    e = {"file": name, "width": W, "height": H, "bands": int(data.shape[0]),
         "valid": int(valid.sum()), "sums": s, "wsums": ws, "options": options}
    e.update({k: v for k, v in extra.items() if v is not None})
    entries.append(e)


def main():
    os.makedirs(OUT, exist_ok=True)
    entries = []

    # Sparse: zero blocks with no nodata are left out under SPARSE_OK.
    data = base()
    empty = np.zeros((H, W), bool)
    empty[0:16, 0:32] = True
    empty[32:48, 48:64] = True
    data[:, empty] = 0
    valid = ~empty
    for comp in ["none", "deflate", "lzw", "zstd"]:
        name = f"sparse_{comp}_tiles.tif"
        opts = dict(tiled=True, blockxsize=16, blockysize=16, compress=comp, sparse_ok=True)
        with rasterio.open(os.path.join(OUT, name), "w", **profile(4, **opts)) as d:
            d.write(data)
        with rasterio.open(os.path.join(OUT, name)) as d:
            assert (d.read() == data).all()
        record(entries, name, data, valid, {k: str(v) for k, v in opts.items()})
    name = "sparse_deflate_strips.tif"
    opts = dict(blockysize=8, compress="deflate", sparse_ok=True)
    sdata = base()
    sempty = np.zeros((H, W), bool)
    sempty[8:24, :] = True
    sdata[:, sempty] = 0
    with rasterio.open(os.path.join(OUT, name), "w", **profile(4, **opts)) as d:
        d.write(sdata)
    record(entries, name, sdata, ~sempty, {k: str(v) for k, v in opts.items()})

    # Masks, internal and external.
    data = base()
    mask = np.full((H, W), 255, np.uint8)
    mask[:, 48:] = 0
    for name, internal in [("mask_internal.tif", True), ("mask_external.tif", False)]:
        path = os.path.join(OUT, name)
        if os.path.exists(path + ".msk"):
            os.remove(path + ".msk")
        with rasterio.Env(GDAL_TIFF_INTERNAL_MASK=internal):
            with rasterio.open(path, "w", **profile(4, tiled=True, blockxsize=16,
                                                     blockysize=16, compress="deflate")) as d:
                d.write(data)
                d.write_mask(mask)
        with rasterio.open(path) as d:
            assert (d.dataset_mask() == mask).all(), name
        assert os.path.exists(path + ".msk") != internal
        record(entries, name, data, mask > 0, {"internal_mask": internal})

    # Alpha.
    rgb = base(3, "uint8")
    alpha = np.full((H, W), 255, np.uint8)
    alpha[40:, :] = 0
    name = "alpha_rgba.tif"
    with rasterio.open(os.path.join(OUT, name), "w",
                       **profile(4, "uint8", photometric="RGB", alpha="YES")) as d:
        d.write(np.concatenate([rgb, alpha[None]]))
    with rasterio.open(os.path.join(OUT, name)) as d:
        assert d.colorinterp[3] == rasterio.enums.ColorInterp.alpha
    record(entries, name, rgb, alpha > 0, {"photometric": "RGB", "alpha": "YES"})
    data = base()
    alpha16 = np.full((H, W), 65535, np.uint16)
    alpha16[:, :8] = 0
    name = "alpha_4band.tif"
    with rasterio.open(os.path.join(OUT, name), "w",
                       **profile(5, photometric="MINISBLACK")) as d:
        ci = rasterio.enums.ColorInterp
        d.colorinterp = [ci.gray, ci.undefined, ci.undefined, ci.undefined, ci.alpha]
        d.write(np.concatenate([data, alpha16[None]]))
    with rasterio.open(os.path.join(OUT, name)) as d:
        assert d.colorinterp[4] == rasterio.enums.ColorInterp.alpha
    record(entries, name, data, alpha16 > 0, {"photometric": "MINISBLACK", "colorinterp": "alpha last"})

    # ZSTD with many bands.
    data = base(20)
    name = "zstd_20band.tif"
    opts = dict(tiled=True, blockxsize=16, blockysize=16, compress="zstd", predictor=2,
                interleave="pixel")
    with rasterio.open(os.path.join(OUT, name), "w", **profile(20, **opts)) as d:
        d.write(data)
    with rasterio.open(os.path.join(OUT, name)) as d:
        assert d.compression.name.lower() == "zstd"
    record(entries, name, data, np.ones((H, W), bool), {k: str(v) for k, v in opts.items()})

    # Scale, offset, descriptions, nodata.
    data = base()
    data[:, 0:4, 0:4] = 0
    names = ["blue", "green", "red", "nir"]
    scales = [0.0001] * 4
    offsets = [-0.1] * 4
    name = "scale_offset.tif"
    with rasterio.open(os.path.join(OUT, name), "w", **profile(4, nodata=0)) as d:
        d.write(data)
        d.scales = scales
        d.offsets = offsets
        for b, n in enumerate(names, 1):
            d.set_band_description(b, n)
    with rasterio.open(os.path.join(OUT, name)) as d:
        assert list(d.descriptions) == names and list(d.scales) == scales
    valid = np.ones((H, W), bool)
    valid[0:4, 0:4] = False
    record(entries, name, data, valid, {"nodata": 0}, scales=scales, offsets=offsets,
           descriptions=names)

    # Cloud masks for scale_offset.tif.
    clouds = np.zeros((H, W), np.uint8)
    clouds[20:30, 10:30] = 1
    for name, t in [("clouds_same_grid.tif", T), ("clouds_other_grid.tif", T * Affine.translation(0.5, 0))]:
        p = profile(1, "uint8", transform=t)
        with rasterio.open(os.path.join(OUT, name), "w", **p) as d:
            d.write(clouds[None])
    cvalid = valid & (clouds == 0)
    s, ws = sums(data, cvalid, scales, offsets)
    entries.append({"file": "scale_offset.tif + clouds_same_grid.tif", "valid": int(cvalid.sum()),
                    "sums": s, "wsums": ws})

    # Red and NIR both 0 on an 8 x 8 block (no nodata set): NDVI undefined there.
    data = base()
    data[2:4, 0:8, 0:8] = 0
    name = "undefined_ndvi.tif"
    with rasterio.open(os.path.join(OUT, name), "w", **profile(4, compress="deflate")) as d:
        d.write(data)
    red, nir = data[2].astype(float), data[3].astype(float)
    record(entries, name, data, np.ones((H, W), bool), {},
           undefined_ndvi_3_4=int(((red + nir) == 0).sum()))

    # Scenes in Web Mercator and geographic coordinates, with the geodesic area of their whole
    # footprint (pyproj.Geod on WGS 84, i.e. GeographicLib, Karney 2013; each side split into
    # 256 pieces along the grid's own edges).
    import math
    import pyproj
    geod = pyproj.Geod(ellps="WGS84")
    merc_y = 6378137.0 * math.log(math.tan(math.pi / 4 + math.radians(47.8) / 2))
    for name, crs, t in [
        ("webmercator_scene.tif", CRS.from_epsg(3857),
         Affine(10.0, 0.0, 1_300_000.0, 0.0, -10.0, merc_y)),
        ("geographic_scene.tif", CRS.from_epsg(4326),
         Affine(0.0001, 0.0, 11.0, 0.0, -0.0001, 47.81)),
    ]:
        data = base()
        with rasterio.open(os.path.join(OUT, name), "w",
                           **profile(4, crs=crs, transform=t, compress="deflate")) as d:
            d.write(data)
        to_ll = pyproj.Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
        ring = []
        for (c0, r0), (c1, r1) in [((0, 0), (W, 0)), ((W, 0), (W, H)), ((W, H), (0, H)),
                                   ((0, H), (0, 0))]:
            for k in range(256):
                f = k / 256
                ring.append(to_ll.transform(*(t * (c0 + (c1 - c0) * f, r0 + (r1 - r0) * f))))
        area, _ = geod.polygon_area_perimeter([p[0] for p in ring], [p[1] for p in ring])
        record(entries, name, data, np.ones((H, W), bool), {"crs": crs.to_string()},
               footprint_area_m2=abs(area))

    meta = {"gdal": rasterio.__gdal_version__, "rasterio": rasterio.__version__,
            "numpy": np.__version__, "weight": "1 + (31*y + 17*x) % 101", "files": entries}
    with open(os.path.join(OUT, "expected.json"), "w") as f:
        json.dump(meta, f, indent=1)
    for e in entries:
        print(e["file"], e["valid"])


if __name__ == "__main__":
    main()
