"""Speed and memory of `chromasift batch` on a folder of 2-megapixel photos.

    cargo build --release
    python3 benches/batch_bench.py [--count 200] [--folder /tmp/chromasift-bench/roll200]

Builds (once, cached in --folder) `count` JPEG photos of 1632 x 1224 (2.0 MP), each a
seeded random crop of one of four public-domain / CC0 photographs bundled with
scikit-image (coffee, chelsea, astronaut, rocket), resized, with a seeded exposure and
white-balance shift and sensor-like noise so that no two are alike. Then runs, each into a
fresh output folder and under /usr/bin/time -v:

    batch ROLL -k 16 --jobs 1            per-image palettes, one worker
    batch ROLL -k 16 --jobs 2            per-image palettes, two workers
    batch ROLL -k 16 --jobs 2 --shared   one palette for the whole roll

and prints wall time, images per second, peak resident memory and the 1 -> 2 job speed-up.
Targets (issue: folders of images): >= 8 images/s with 2 jobs, --shared under 60 s, speed-up
>= 1.8x, peak memory bounded.
"""
import argparse
import json
import os
import re
import shutil
import subprocess
import tempfile

import numpy as np
from PIL import Image
from skimage import data

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(os.environ.get("CARGO_TARGET_DIR") or os.path.join(ROOT, "target"), "release", "chromasift")
W, H = 1632, 1224


def make_roll(folder, count, seed=5):
    os.makedirs(folder, exist_ok=True)
    have = [f for f in os.listdir(folder) if f.endswith(".jpg")]
    if len(have) == count:
        return
    for f in have:
        os.remove(os.path.join(folder, f))
    bases = [data.coffee(), data.chelsea(), data.astronaut(), data.rocket()]
    rng = np.random.default_rng(seed)
    for i in range(count):
        base = bases[i % len(bases)]
        bh, bw = base.shape[:2]
        cw = int(bw * rng.uniform(0.55, 0.9))
        ch = min(bh, int(cw * H / W))
        x0 = int(rng.integers(0, bw - cw + 1))
        y0 = int(rng.integers(0, bh - ch + 1))
        crop = Image.fromarray(base[y0:y0 + ch, x0:x0 + cw]).resize((W, H), Image.BICUBIC)
        a = np.asarray(crop).astype(np.float32)
        a = a * rng.uniform(0.85, 1.15) * rng.uniform(0.93, 1.07, size=3)
        a += rng.normal(0, 2.0, size=a.shape)
        Image.fromarray(np.clip(a, 0, 255).astype(np.uint8)).save(
            os.path.join(folder, f"frame{i:04d}.jpg"), quality=90)


def timed(args):
    r = subprocess.run(["/usr/bin/time", "-v", BIN] + args, capture_output=True, text=True)
    if r.returncode != 0:
        raise SystemExit(f"chromasift failed ({r.returncode}):\n{r.stderr}")
    wall = re.search(r"Elapsed \(wall clock\) time.*: (?:(\d+):)?(\d+):([\d.]+)", r.stderr)
    h = int(wall.group(1) or 0)
    seconds = h * 3600 + int(wall.group(2)) * 60 + float(wall.group(3))
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", r.stderr).group(1))
    return seconds, rss * 1024 / 1e6  # /usr/bin/time reports KiB; MB = 10^6 bytes


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--count", type=int, default=200)
    ap.add_argument("--folder", default="/tmp/chromasift-bench/roll200")
    a = ap.parse_args()
    make_roll(a.folder, a.count)
    results = {}
    for name, extra in [("jobs1", ["--jobs", "1"]), ("jobs2", ["--jobs", "2"]),
                        ("shared", ["--jobs", "2", "--shared"])]:
        out = tempfile.mkdtemp(prefix="chromasift-batch-")
        try:
            s, rss = timed(["batch", a.folder, "-k", "16", "-o", out, "--quiet"] + extra)
        finally:
            shutil.rmtree(out, ignore_errors=True)
        results[name] = {"seconds": round(s, 2), "images_per_second": round(a.count / s, 2),
                         "peak_rss_mb": round(rss, 1)}
        print(f"{name:7s} {s:7.2f} s  {a.count / s:6.2f} images/s  peak {rss:7.1f} MB", flush=True)
    speedup = results["jobs1"]["seconds"] / results["jobs2"]["seconds"]
    results["speedup_1_to_2_jobs"] = round(speedup, 3)
    print(f"speed-up 1 -> 2 jobs: {speedup:.2f}x")
    print(json.dumps(results))


if __name__ == "__main__":
    main()
