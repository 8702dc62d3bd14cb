"""Speed and memory of `chromasift separate` on large artwork.

    cargo build --release
    python3 benches/separate_bench.py [--width 6000 --height 4000]

Makes invented artwork (flat shapes in 12 colours with soft, anti-aliased edges and mild
scan noise; 6000 x 4000 by default) and an invented 30-ink library in a temporary folder,
then runs `chromasift separate art.png --inks inks.csv -k 6 --min-area 50` under
/usr/bin/time -v. Prints wall time and peak resident memory. Targets: under 5 s and 1 GB
on 2 cores.
"""
import argparse
import os
import re
import subprocess
import tempfile

import numpy as np
from PIL import Image, ImageDraw, ImageFilter

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "chromasift")


def artwork(path, w, h, seed=7):
    rng = np.random.default_rng(seed)
    colours = [tuple(int(v) for v in rng.integers(0, 256, 3)) for _ in range(12)]
    img = Image.new("RGB", (w, h), (250, 248, 240))
    d = ImageDraw.Draw(img)
    for _ in range(400):
        x0, y0 = int(rng.integers(0, w)), int(rng.integers(0, h))
        s = int(rng.integers(w // 60, w // 6))
        c = colours[int(rng.integers(0, len(colours)))]
        if rng.random() < 0.5:
            d.ellipse([x0, y0, x0 + s, y0 + int(s * rng.uniform(0.4, 1.0))], fill=c)
        else:
            d.rectangle([x0, y0, x0 + s, y0 + int(s * rng.uniform(0.2, 1.0))], fill=c)
    img = img.filter(ImageFilter.GaussianBlur(1.2))
    a = np.asarray(img).astype(np.int16) + rng.integers(-3, 4, size=(h, w, 3), dtype=np.int16)
    Image.fromarray(np.clip(a, 0, 255).astype(np.uint8)).save(path, compress_level=1)


def library(path, n=30, seed=11):
    rng = np.random.default_rng(seed)
    with open(path, "w") as f:
        f.write("name,L,a,b\n")
        for i in range(n):
            f.write(f"Bench ink {i:02d},{rng.uniform(10, 95):.2f},{rng.uniform(-60, 60):.2f},{rng.uniform(-60, 70):.2f}\n")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--width", type=int, default=6000)
    ap.add_argument("--height", type=int, default=4000)
    a = ap.parse_args()
    tmp = tempfile.mkdtemp()
    art, inks = os.path.join(tmp, "art.png"), os.path.join(tmp, "inks.csv")
    artwork(art, a.width, a.height)
    library(inks)
    r = subprocess.run(["/usr/bin/time", "-v", BIN, "separate", art, "--inks", inks, "-k", "6", "--min-area", "50",
                        "-o", os.path.join(tmp, "plates")], capture_output=True, text=True)
    if r.returncode != 0:
        print(r.stderr)
        raise SystemExit(1)
    wall = re.search(r"Elapsed \(wall clock\) time.*: (.*)", r.stderr).group(1)
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", r.stderr).group(1))
    print("\n".join(l for l in r.stderr.splitlines() if not l.startswith("\t")))
    print(f"separate {a.width}x{a.height}, 30 inks, -k 6, --min-area 50: wall {wall}, peak RSS {rss * 1024 / 1e6:.0f} MB "
          f"(targets: < 5 s, < 1000 MB; MB = 10^6 bytes)")
    subprocess.run(["rm", "-rf", tmp])


if __name__ == "__main__":
    main()
