"""Speed and memory of `chromasift landcover` on a large scene.

    cargo build --release
    python3 benches/landcover_bench.py [--size 10000] [--keep]

Writes an invented 4-band 16-bit scene (size x size pixels, uncompressed strips, 10 m UTM
georeferencing; smooth fields of six surface types plus noise; 800 MB at 10 000 x 10 000)
to a temporary folder, runs `chromasift landcover scene.tif -k 8` under /usr/bin/time -v,
and prints wall time, peak resident memory and the size of each output (the rasters are
Cloud-Optimized GeoTIFFs: 256-pixel DEFLATE tiles with a predictor and overviews; BigTIFF
only past 3.75 GiB), with the bytes of each level of the two rasters. Targets: under 30 s
and 1.5 GB on 2 cores.
`CHROMASIFT_BIN=path` runs another build of the binary.
"""
import argparse
import os
import re
import subprocess
import tempfile
import time

import numpy as np
import tifffile

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.environ.get("CHROMASIFT_BIN", os.path.join(ROOT, "target", "release", "chromasift"))


def make_scene(path, size, seed=20261201):
    rng = np.random.default_rng(seed)
    spectra = np.array([[600, 500, 300, 200], [300, 600, 400, 4000], [500, 1100, 700, 5800],
                        [1200, 1600, 2200, 2800], [2000, 2000, 2100, 2300], [900, 1200, 1500, 3200]], np.float32)
    block = 500  # rows written per step, to bound this script's memory
    cells = 40
    cell_class = rng.integers(0, len(spectra), size=(cells, cells))
    geokeys = (1, 1, 0, 4, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32633, 3076, 0, 1, 9001)
    extratags = [(33550, 12, 3, (10.0, 10.0, 0.0), True),
                 (33922, 12, 6, (0.0, 0.0, 0.0, 500000.0, 5000000.0, 0.0), True),
                 (34735, 3, len(geokeys), geokeys, True)]

    def rows():
        for y0 in range(0, size, block):
            h = min(block, size - y0)
            yy = (np.arange(y0, y0 + h) * cells // size)[:, None]
            xx = (np.arange(size) * cells // size)[None, :]
            cls = cell_class[yy, xx]
            data = spectra[cls] + rng.normal(0, 60, size=(h, size, 4)).astype(np.float32)
            yield np.clip(data, 1, 65535).astype(np.uint16)

    tifffile.imwrite(path, rows(), shape=(size, size, 4), dtype=np.uint16, photometric="minisblack",
                     planarconfig="contig", rowsperstrip=16, extratags=extratags)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", type=int, default=10000)
    ap.add_argument("--keep", action="store_true")
    a = ap.parse_args()
    tmp = tempfile.mkdtemp()
    scene = os.path.join(tmp, "scene.tif")
    t = time.time()
    make_scene(scene, a.size)
    print(f"scene {a.size} x {a.size} x 4 bands uint16: {os.path.getsize(scene) / 1e6:.0f} MB, made in {time.time() - t:.1f} s")
    out = os.path.join(tmp, "out")
    r = subprocess.run(["/usr/bin/time", "-v", BIN, "landcover", scene, "-k", "8", "-o", out],
                       capture_output=True, text=True)
    if r.returncode != 0:
        print(r.stderr)
        raise SystemExit(1)
    wall = re.search(r"Elapsed \(wall clock\) time.*: (.*)", r.stderr).group(1)
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", r.stderr).group(1))
    print([l for l in r.stderr.splitlines() if l.startswith("chromasift:")][0])
    print(f"landcover -k 8: wall {wall}, peak RSS {rss * 1024 / 1e6:.0f} MB (targets: < 30 s, < 1500 MB; MB = 10^6 bytes)")
    sizes = {n: os.path.getsize(os.path.join(out, n)) for n in sorted(os.listdir(out))}
    for n, b in sizes.items():
        print(f"  {n}: {b / 1e6:.1f} MB")
    print(f"  outputs in all: {sum(sizes.values()) / 1e6:.1f} MB (input {os.path.getsize(scene) / 1e6:.0f} MB)")
    for n in sorted(sizes):
        if n.endswith(".tif"):
            with tifffile.TiffFile(os.path.join(out, n)) as t:
                levels = [f"{p.shape[1]}x{p.shape[0]} {sum(p.databytecounts) / 1e6:.1f}" for p in t.pages]
            print(f"  {n} levels (MB): " + ", ".join(levels))
    if not a.keep:
        subprocess.run(["rm", "-rf", tmp])


if __name__ == "__main__":
    main()
