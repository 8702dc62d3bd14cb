"""`chromasift batch` against a plain Python loop on the same 2-megapixel JPEGs.

    CARGO_PROFILE_RELEASE_LTO=false cargo build --release
    python3 benches/batch_vs_python.py [--count 40] [--k 16] [--jobs 2]

The photos are the roll of `batch_bench.py` (seeded crops of scikit-image's public-domain
samples, 1632 x 1224, JPEG quality 90), built once in --folder. Measured, each into a
fresh output folder:

- `chromasift batch ROLL -k K --jobs J` (CIELAB, the default colour-family objective);
- the same with `--loss-map` and `--review-page` (the extra outputs of issue 25);
- a plain Python loop over the same files: Pillow decode, scikit-learn MiniBatchKMeans
  (K clusters, random_state 0, its defaults otherwise) on every pixel's RGB, each pixel
  replaced by its centre, the result saved as PNG. One process, as such a loop is written.

Prints images per second for each; the target (issue 25) is >= 8 images/s for batch.
"""
import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np
from PIL import Image
from sklearn.cluster import MiniBatchKMeans

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from batch_bench import BIN, make_roll  # noqa: E402


def run_batch(roll, k, jobs, extra):
    out = tempfile.mkdtemp(prefix="cs-batch-")
    t = time.perf_counter()
    subprocess.run([BIN, "batch", roll, "-k", str(k), "--jobs", str(jobs), "--quiet", "-o", out] + extra,
                   check=True)
    dt = time.perf_counter() - t
    shutil.rmtree(out)
    return dt


def python_loop(files, k):
    out = tempfile.mkdtemp(prefix="cs-py-")
    t = time.perf_counter()
    for f in files:
        rgb = np.asarray(Image.open(f).convert("RGB"))
        px = rgb.reshape(-1, 3).astype(np.float32)
        km = MiniBatchKMeans(n_clusters=k, random_state=0).fit(px)
        reduced = km.cluster_centers_[km.labels_].round().clip(0, 255).astype(np.uint8)
        Image.fromarray(reduced.reshape(rgb.shape)).save(
            os.path.join(out, os.path.basename(f) + ".png"))
    dt = time.perf_counter() - t
    shutil.rmtree(out)
    return dt


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--count", type=int, default=40)
    ap.add_argument("--k", type=int, default=16)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--folder", default=None)
    a = ap.parse_args()
    roll = a.folder or os.path.join(tempfile.gettempdir(), "chromasift-bench", f"roll{a.count}")
    make_roll(roll, a.count)
    files = sorted(os.path.join(roll, f) for f in os.listdir(roll) if f.endswith(".jpg"))
    print(f"{len(files)} JPEGs of 1632 x 1224 in {roll}; K = {a.k}; load {os.getloadavg()[0]:.1f}")
    for name, extra in [("batch", []), ("batch --loss-map --review-page", ["--loss-map", "--review-page"])]:
        dt = run_batch(roll, a.k, a.jobs, extra)
        print(f"{name} --jobs {a.jobs}: {dt:.2f} s = {len(files) / dt:.2f} images/s")
    dt = python_loop(files, a.k)
    print(f"Pillow + MiniBatchKMeans loop: {dt:.2f} s = {len(files) / dt:.2f} images/s")
    print(f"load after: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
