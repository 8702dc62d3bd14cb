#!/usr/bin/env python3
"""Regenerate chromasift's small multi-band TIFF / GeoTIFF fixtures.

Run from the repository root:

    python3 tests/reference/make_raster_fixtures.py

The pixel values are invented: a synthetic, deterministic pattern made only
for decoder tests (no real imagery, no seeds, no clocks, no network).  The
same pattern is stored in several TIFF layouts so that the Rust tests in
``src/geotiff.rs`` can check that every layout decodes to identical values.

Needs numpy, tifffile and imagecodecs (for LZW and the predictors).

Writes into ``fixtures/rasters/``:

utm_u16_4band_strips.tif
    The base data set: 40 x 30 pixels, 4 bands, uint16, pixel-interleaved
    (chunky), 7 rows per strip, uncompressed.  GeoTIFF tags for WGS 84 /
    UTM zone 33N (EPSG 32633, metres): ModelPixelScale (10, 10, 0), one
    ModelTiepoint, a GeoKeyDirectory referring to GeoAsciiParams and
    GeoDoubleParams, and GDAL_NODATA "0".  The top-left 5 x 3 pixels are 0
    in every band (the nodata value); no other sample is 0.
utm_u16_4band_planar_tiled_deflate.tif
    The same values and tags, band-sequential (planar), 16 x 16 tiles (so the
    right and bottom tiles are padded), Deflate.
utm_u16_4band_lzw.tif
    The same values and tags, chunky, 4 rows per strip, LZW with the
    horizontal predictor.
utm_i16_3band_tiled.tif
    int16, 3 bands: the first three bands of the base set minus 30000
    (negative values included), chunky 16 x 16 tiles, uncompressed, same
    tags but no nodata.
utm_f32_6band_nan.tif
    float32, 6 bands of quarter-integers (exact in float32) with NaN at
    scattered pixels, planar strips of 8 rows, Deflate with the floating-point
    predictor, same tags, GDAL_NODATA "nan".
utm_u8_rgbn_photometric_rgb.tif
    uint8, 4 bands written the way 4-band aerial images often are:
    PhotometricInterpretation RGB plus one ExtraSamples entry "unspecified";
    UTM tags with 0.5 m pixels.
utm_u16_rgbn_bigtiff_be.tif
    The base uint16 values again, as a big-endian BigTIFF with
    PhotometricInterpretation RGB plus one unspecified extra sample, LZW with
    the horizontal predictor, 5 rows per strip, same tags and nodata.
geographic_u8_rgb.tif
    uint8 RGB, geographic CRS (EPSG 4326, degrees): GTModelType 2,
    GeographicType 4326, pixel scale 0.0001 degrees.
transform_f64_1band.tif
    float64, 1 band, georeferenced with a ModelTransformation (rotated
    2 m pixels, |determinant| = 4 square metres) instead of scale and tiepoint.
plain_u32_1band.tif
    uint32, 1 band, values near 16 million (exact in float32), no GeoTIFF tags.
plain_i32_2band_planar_lzw.tif
    int32, 2 bands, planar strips, LZW, no GeoTIFF tags.
expected.json
    For each file: layout, the GeoTIFF tags as written, nodata, and the
    expected values as per-band checksums plus a few exact pixels.

Checksum scheme (per band, over every pixel, computed in float64 on the values
converted to float32, which is exact for all values used here):

    count      number of pixels that are not NaN
    nan_count  number of NaN pixels
    sum        sum of the non-NaN values
    wsum       sum of value * w(y, x) over non-NaN pixels,
               w(y, x) = 1 + (31 * y + 17 * x) % 101
    nan_wsum   sum of w(y, x) over NaN pixels

All terms are multiples of 0.25 well below 2**53, so the sums are exact in any
summation order.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import tifffile

W, H = 40, 30
OUT = Path("fixtures/rasters")

UTM_ASCII = "WGS 84 / UTM zone 33N|"
UTM_DOUBLES = [6378137.0, 298.257223563]
GEO_ASCII = "WGS 84|"


def utm_keys() -> list[int]:
    """GeoKeyDirectory for EPSG 32633, metres, with one ASCII and two DOUBLE keys."""
    keys = [
        (1024, 0, 1, 1),  # GTModelTypeGeoKey = projected
        (1025, 0, 1, 1),  # GTRasterTypeGeoKey = PixelIsArea
        (1026, 34737, len(UTM_ASCII), 0),  # GTCitationGeoKey -> GeoAsciiParams
        (2057, 34736, 1, 0),  # GeogSemiMajorAxisGeoKey -> GeoDoubleParams[0]
        (2059, 34736, 1, 1),  # GeogInvFlatteningGeoKey -> GeoDoubleParams[1]
        (3072, 0, 1, 32633),  # ProjectedCSTypeGeoKey = WGS 84 / UTM 33N
        (3076, 0, 1, 9001),  # ProjLinearUnitsGeoKey = metre
    ]
    return [1, 1, 0, len(keys)] + [v for k in keys for v in k]


def geographic_keys() -> list[int]:
    keys = [
        (1024, 0, 1, 2),  # GTModelTypeGeoKey = geographic
        (1025, 0, 1, 1),  # PixelIsArea
        (2048, 0, 1, 4326),  # GeographicTypeGeoKey = WGS 84
        (2049, 34737, len(GEO_ASCII), 0),  # GeogCitationGeoKey
        (2054, 0, 1, 9102),  # GeogAngularUnitsGeoKey = degree
    ]
    return [1, 1, 0, len(keys)] + [v for k in keys for v in k]


def utm_geo(scale: float = 10.0) -> dict:
    return {
        "pixel_scale": [scale, scale, 0.0],
        "tiepoint": [0.0, 0.0, 0.0, 499980.0, 4600020.0, 0.0],
        "transformation": None,
        "key_directory": utm_keys(),
        "double_params": UTM_DOUBLES,
        "ascii_params": UTM_ASCII,
    }


def geographic_geo() -> dict:
    return {
        "pixel_scale": [0.0001, 0.0001, 0.0],
        "tiepoint": [0.0, 0.0, 0.0, 12.5, 41.9, 0.0],
        "transformation": None,
        "key_directory": geographic_keys(),
        "double_params": None,
        "ascii_params": GEO_ASCII,
    }


def transform_geo() -> dict:
    keys = [
        (1024, 0, 1, 1),
        (1025, 0, 1, 1),
        (3072, 0, 1, 32633),
        (3076, 0, 1, 9001),
    ]
    return {
        "pixel_scale": None,
        "tiepoint": None,
        # Row-major 4x4: x' = 1.6 i + 1.2 j + 499980, y' = 1.2 i - 1.6 j + 4600020.
        "transformation": [
            1.6, 1.2, 0.0, 499980.0,
            1.2, -1.6, 0.0, 4600020.0,
            0.0, 0.0, 0.0, 0.0,
            0.0, 0.0, 0.0, 1.0,
        ],
        "key_directory": [1, 1, 0, len(keys)] + [v for k in keys for v in k],
        "double_params": None,
        "ascii_params": None,
    }


def extratags(geo: dict | None, nodata: str | None) -> list[tuple]:
    tags = []
    if geo is not None:
        if geo["pixel_scale"] is not None:
            tags.append((33550, "d", 3, geo["pixel_scale"], True))
        if geo["tiepoint"] is not None:
            tags.append((33922, "d", len(geo["tiepoint"]), geo["tiepoint"], True))
        if geo["transformation"] is not None:
            tags.append((34264, "d", 16, geo["transformation"], True))
        tags.append((34735, "H", len(geo["key_directory"]), geo["key_directory"], True))
        if geo["double_params"] is not None:
            tags.append((34736, "d", len(geo["double_params"]), geo["double_params"], True))
        if geo["ascii_params"] is not None:
            tags.append((34737, "s", 0, geo["ascii_params"], True))
    if nodata is not None:
        tags.append((42113, "s", 0, nodata, True))
    return tags


def base_u16() -> np.ndarray:
    """(bands, H, W) uint16 pattern in 1..60001, with a 0 block at the top left."""
    b, y, x = np.meshgrid(np.arange(4), np.arange(H), np.arange(W), indexing="ij")
    v = (b * 15013 + y * 1009 + x * 211 + ((x * y) % 7) * 3001) % 60001 + 1
    v = v.astype(np.uint16)
    v[:, :3, :5] = 0
    return v


def f32_6band() -> np.ndarray:
    b, y, x = np.meshgrid(np.arange(6), np.arange(H), np.arange(W), indexing="ij")
    v = (((b + 1) * (y * W + x) * 37) % 1000) / 4.0 - 50.0
    v = v.astype(np.float32)
    v[(x + 2 * y + 3 * b) % 17 == 0] = np.nan
    return v


def weights() -> np.ndarray:
    y, x = np.meshgrid(np.arange(H), np.arange(W), indexing="ij")
    return (1 + (31 * y + 17 * x) % 101).astype(np.float64)


def checksums(bands_first: np.ndarray) -> list[dict]:
    w = weights()
    out = []
    for band in bands_first:
        v = band.astype(np.float32).astype(np.float64)
        nan = np.isnan(v)
        ok = ~nan
        out.append(
            {
                "count": int(ok.sum()),
                "nan_count": int(nan.sum()),
                "sum": float(v[ok].sum()),
                "wsum": float((v[ok] * w[ok]).sum()),
                "nan_wsum": float(w[nan].sum()),
            }
        )
    return out


SAMPLE_PIXELS = [(0, 0), (0, 39), (2, 4), (3, 5), (15, 16), (16, 15), (29, 0), (29, 39), (17, 33)]


def exact_pixels(bands_first: np.ndarray) -> list[dict]:
    out = []
    for y, x in SAMPLE_PIXELS:
        vals = []
        for band in bands_first:
            f = float(np.float32(band[y, x]))
            vals.append(None if np.isnan(f) else f)
        out.append({"y": y, "x": x, "values": vals})
    return out


def write(name: str, bands_first: np.ndarray, *, planar: bool, tile=None, rows=None,
          compression=None, predictor=None, photometric="minisblack",
          extrasamples=None, geo=None, nodata=None, bigtiff=False, byteorder="<") -> dict:
    path = OUT / name
    if planar:
        data = bands_first
        planarconfig = "separate"
    else:
        data = np.moveaxis(bands_first, 0, -1)
        planarconfig = "contig"
    if data.ndim == 3 and data.shape[-1] == 1 and not planar:
        data = data[..., 0]
        planarconfig = None
    kwargs = dict(
        photometric=photometric,
        planarconfig=planarconfig,
        compression=compression,
        predictor=predictor,
        extratags=extratags(geo, nodata),
        metadata=None,
        software=False,
    )
    if tile is not None:
        kwargs["tile"] = tile
    if rows is not None:
        kwargs["rowsperstrip"] = rows
    if extrasamples is not None:
        kwargs["extrasamples"] = extrasamples
    tifffile.imwrite(path, data, bigtiff=bigtiff, byteorder=byteorder, **kwargs)

    # Read back with tifffile and compare, so a writer surprise cannot slip into the fixtures.
    back = tifffile.imread(path)
    if planar or back.ndim == 2:
        back_bf = back if back.ndim == 3 else back[np.newaxis]
    else:
        back_bf = np.moveaxis(back, -1, 0)
    if not np.array_equal(back_bf, bands_first, equal_nan=True):
        sys.exit(f"{name}: tifffile read-back differs from the data written")
    size = path.stat().st_size
    if size > 50_000:
        sys.exit(f"{name}: {size} bytes, over the 50 kB budget")

    sample = {
        np.dtype(np.uint8): "u8",
        np.dtype(np.uint16): "u16",
        np.dtype(np.int16): "i16",
        np.dtype(np.uint32): "u32",
        np.dtype(np.int32): "i32",
        np.dtype(np.float32): "f32",
        np.dtype(np.float64): "f64",
    }[bands_first.dtype]
    return {
        "file": name,
        "width": W,
        "height": H,
        "bands": int(bands_first.shape[0]),
        "sample": sample,
        "planar": bool(planar and bands_first.shape[0] > 1),
        "tiled": tile is not None,
        "compression": compression or "none",
        "predictor": predictor or "none",
        "bigtiff": bool(bigtiff),
        "byteorder": "big" if byteorder == ">" else "little",
        "rows_per_strip": rows,
        "tile": list(tile) if tile is not None else None,
        "nodata": nodata,
        "geo": geo,
        "bytes": size,
        "checksums": checksums(bands_first),
        "pixels": exact_pixels(bands_first),
    }


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    u16 = base_u16()
    assert (u16 == 0).sum() == 4 * 15, "only the nodata block may be 0"
    files = []
    files.append(write("utm_u16_4band_strips.tif", u16, planar=False, rows=7,
                       geo=utm_geo(), nodata="0"))
    files.append(write("utm_u16_4band_planar_tiled_deflate.tif", u16, planar=True,
                       tile=(16, 16), compression="zlib", geo=utm_geo(), nodata="0"))
    files.append(write("utm_u16_4band_lzw.tif", u16, planar=False, rows=4,
                       compression="lzw", predictor="horizontal", geo=utm_geo(), nodata="0"))

    i16 = (u16[:3].astype(np.int32) - 30000).astype(np.int16)
    files.append(write("utm_i16_3band_tiled.tif", i16, planar=False, tile=(16, 16),
                       geo=utm_geo()))

    files.append(write("utm_f32_6band_nan.tif", f32_6band(), planar=True, rows=8,
                       compression="zlib", predictor="floatingpoint", geo=utm_geo(),
                       nodata="nan"))

    rgbn = (u16 % 251).astype(np.uint8)
    files.append(write("utm_u8_rgbn_photometric_rgb.tif", rgbn, planar=False, rows=10,
                       photometric="rgb", extrasamples=["unspecified"], geo=utm_geo(0.5)))

    files.append(write("utm_u16_rgbn_bigtiff_be.tif", u16, planar=False, rows=5,
                       compression="lzw", predictor="horizontal", photometric="rgb",
                       extrasamples=["unspecified"], geo=utm_geo(), nodata="0",
                       bigtiff=True, byteorder=">"))

    files.append(write("geographic_u8_rgb.tif", rgbn[:3], planar=False, rows=30,
                       photometric="rgb", geo=geographic_geo()))

    y, x = np.meshgrid(np.arange(H), np.arange(W), indexing="ij")
    f64 = ((y * W + x) * 0.5 - 100.25)[np.newaxis].astype(np.float64)
    files.append(write("transform_f64_1band.tif", f64, planar=False, rows=16,
                       geo=transform_geo()))

    u32 = ((y * W + x) * 13 + 16_000_000)[np.newaxis].astype(np.uint32)
    assert int(u32.max()) < 2**24
    files.append(write("plain_u32_1band.tif", u32, planar=False, rows=30))

    i32 = np.stack([-(y * W + x) * 1000 + 7, (y * W + x) * 911 - 500_000]).astype(np.int32)
    files.append(write("plain_i32_2band_planar_lzw.tif", i32, planar=True, rows=6,
                       compression="lzw"))

    doc = {
        "source": "tests/reference/make_raster_fixtures.py (synthetic pattern for decoder tests)",
        "versions": {
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "tifffile": tifffile.__version__,
        },
        "checksum": {
            "weight": "w(y, x) = 1 + (31 * y + 17 * x) % 101",
            "fields": ["count", "nan_count", "sum", "wsum", "nan_wsum"],
        },
        "files": files,
    }
    try:
        import imagecodecs

        doc["versions"]["imagecodecs"] = imagecodecs.__version__
    except ImportError:
        pass
    (OUT / "expected.json").write_text(json.dumps(doc, indent=1) + "\n")
    for f in files:
        print(f"{f['file']}: {f['bytes']} bytes")


if __name__ == "__main__":
    main()
