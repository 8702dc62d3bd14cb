#!/usr/bin/env python3
"""Reference pixel corners and pixel areas for src/raster/geotiff (crs.rs, area.rs).

For each case: a CRS by EPSG code, the pixel-to-model affine map
(x = c0 + c1*col + c2*row, y = c3 + c4*col + c5*row), a grid size and a few pixels. For each
pixel pyproj gives the longitude/latitude of its four corners on the CRS's own geodetic CRS
(no datum shift) and the geodesic area of its footprint on that CRS's ellipsoid
(pyproj.Geod.polygon_area_perimeter, i.e. GeographicLib, Karney 2013). Pixels spanning more
than 0.0005 degrees have each side split into pieces of at most 0.0005 degrees so that the
polygon follows the pixel's true edges. A polygon of a few metres loses digits (its area is a
small difference of large terms, about 1e-5 m² of rounding), so a smaller pixel's area is
that of the 101 x 101 pixels centred on it, divided by 10201: the area per pixel changes only
by the square of the projection's scale, whose curvature over 101 pixels is far below 1e-9.

Run from the repository root:  python3 tests/reference/crs_areas.py
Writes fixtures/reference/crs_areas.json.
"""
import json
import math
import sys

import pyproj



def merc_y(lat):
    return 6378137.0 * math.log(math.tan(math.pi / 4 + math.radians(lat) / 2))


CASES = [
    # name, epsg, affine c[6], width, height, pixels [(col, row)]
    ("wgs84 geographic 0.0001 deg at 47.8N", 4326,
     [11.0, 0.0001, 0.0, 47.81, 0.0, -0.0001], 200, 200, [(0, 0), (10, 100), (199, 199)]),
    ("wgs84 geographic 1 deg pixels", 4326,
     [-10.0, 1.0, 0.0, 70.0, 0.0, -1.0], 20, 60, [(0, 0), (3, 10), (5, 59)]),
    ("nad83 geographic 0.001 deg", 4269,
     [-100.0, 0.001, 0.0, 40.0, 0.0, -0.001], 100, 100, [(0, 0), (50, 99)]),
    ("ed50 geographic 0.01 deg", 4230,
     [5.0, 0.01, 0.0, 52.0, 0.0, -0.01], 50, 50, [(7, 7)]),
    ("web mercator 10 m at 47.8N", 3857,
     [1_300_000.0, 10.0, 0.0, merc_y(47.8), 0.0, -10.0], 300, 300, [(0, 0), (150, 150), (299, 299)]),
    ("web mercator 10 km pixels", 3857,
     [0.0, 10_000.0, 0.0, merc_y(60.0), 0.0, -10_000.0], 50, 50, [(0, 0), (20, 30)]),
    ("utm 33N 10 m east of centre", 32633,
     [700_000.0, 10.0, 0.0, 5_300_000.0, 0.0, -10.0], 300, 300, [(0, 0), (37, 150), (299, 299)]),
    ("utm 33S 30 m", 32733,
     [300_000.0, 30.0, 0.0, 7_000_000.0, 0.0, -30.0], 300, 300, [(0, 0), (100, 200), (299, 299)]),
    ("etrs89 utm 32N 20 m", 25832,
     [400_000.0, 20.0, 0.0, 5_800_000.0, 0.0, -20.0], 150, 150, [(0, 0), (77, 23)]),
    ("nad83 utm 15N 30 m", 26915,
     [600_000.0, 30.0, 0.0, 4_500_000.0, 0.0, -30.0], 150, 150, [(149, 149)]),
    ("utm 33N rotated 2 m pixels", 32633,
     [650_000.0, 1.7320508075688772, 1.0, 5_200_000.0, 1.0, -1.7320508075688772], 300, 300,
     [(0, 0), (130, 70), (299, 299)]),
    ("utm 33N 1 km pixels far from centre", 32633,
     [150_000.0, 1000.0, 0.0, 6_000_000.0, 0.0, -1000.0], 200, 200, [(0, 0), (100, 100), (199, 199)]),
]


def affine(c, col, row):
    return c[0] + c[1] * col + c[2] * row, c[3] + c[4] * col + c[5] * row


def main():
    out = {"pyproj": pyproj.__version__, "proj": pyproj.proj_version_str,
           "cases": []}
    for name, epsg, c, width, height, pixels in CASES:
        crs = pyproj.CRS.from_epsg(epsg)
        geod_crs = crs.geodetic_crs
        to_ll = pyproj.Transformer.from_crs(crs, geod_crs, always_xy=True)
        ell = geod_crs.ellipsoid
        geod = pyproj.Geod(a=ell.semi_major_metre, rf=ell.inverse_flattening)
        rows = []
        for col, row in pixels:
            corners = [(col, row), (col + 1, row), (col + 1, row + 1), (col, row + 1)]
            ll = [to_ll.transform(*affine(c, x, y)) for x, y in corners]
            span = max(max(abs(p[0] - q[0]), abs(p[1] - q[1])) for p in ll for q in ll)
            block = 101 if span < 0.001 else 1
            h = block // 2
            bc = [(col - h, row - h), (col + h + 1, row - h), (col + h + 1, row + h + 1),
                  (col - h, row + h + 1)]
            bll = [to_ll.transform(*affine(c, x, y)) for x, y in bc]
            span = max(max(abs(p[0] - q[0]), abs(p[1] - q[1])) for p in bll for q in bll)
            pieces = min(max(math.ceil(span / 0.0005), 1), 2000)
            lons, lats = [], []
            for k in range(4):
                (x0, y0), (x1, y1) = bc[k], bc[(k + 1) % 4]
                for p in range(pieces):
                    t = p / pieces
                    lon, lat = to_ll.transform(*affine(c, x0 + (x1 - x0) * t, y0 + (y1 - y0) * t))
                    lons.append(lon)
                    lats.append(lat)
            area, _ = geod.polygon_area_perimeter(lons, lats)
            rows.append({"col": col, "row": row, "corners_lonlat": ll,
                         "area_m2": abs(area) / (block * block)})
        model_type = 2 if crs.is_geographic else 1
        out["cases"].append({"name": name, "epsg": epsg, "model_type": model_type,
                             "affine": c, "width": width, "height": height,
                             "ellipsoid": [ell.semi_major_metre, ell.inverse_flattening],
                             "pixels": rows})
    json.dump(out, open("fixtures/reference/crs_areas.json", "w"), indent=1)
    print("wrote fixtures/reference/crs_areas.json", file=sys.stderr)


if __name__ == "__main__":
    main()
