"""How far below one k-means++ run can any k-means solution go on the test photographs?

Not a speed test: the measurement behind the photo SSE figures of DEVELOPERS.md
("Global refinement"). For each photograph of `fixtures/photos` (the 160-pixel-wide
downscales that `tests/reference/engine_sklearn.py` writes from scikit-image's and
scikit-learn's colour samples), on the same CIELAB pixels as that script
(skimage.color.rgb2lab):

- the best inertia of `--starts` scikit-learn KMeans(k-means++, n_init=1) runs
  (random_state 1000, 1001, ...);
- random swap (Franti 2018, "Efficiency of random swap clustering", J. Big Data 5:13)
  from the best of 20 starts: `--swaps` trials, each replacing a uniformly drawn centre
  by a uniformly drawn pixel and re-running scikit-learn's Lloyd to convergence, kept
  when the inertia falls.

Each figure is divided by the photo's `inertia_n_init_1_mean` in
`fixtures/reference/engine_sklearn.json` (the expected SSE of one run), and the script
prints the geometric means. With `--full` it does the same on the photographs at the
size they ship (the best of the ten reference seeds only; random swap is too slow there).

    OMP_NUM_THREADS=1 python3 benches/photo_sse_floor.py [--starts 300] [--swaps 1000] [--full]
"""
import argparse
import json
import os

import numpy as np
from PIL import Image
from skimage import data as skdata
from skimage.color import rgb2lab
from sklearn.cluster import KMeans
from sklearn.datasets import load_sample_images

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
REF = os.path.join(ROOT, "fixtures", "reference", "engine_sklearn.json")
K = 16


def gmean(xs):
    return float(np.exp(np.mean(np.log(xs))))


def best_of_starts(lab, starts):
    return min(KMeans(K, init="k-means++", n_init=1, random_state=1000 + s).fit(lab).inertia_
               for s in range(starts))


def random_swap(lab, trials, rng):
    km = KMeans(K, init="k-means++", n_init=20, random_state=0).fit(lab)
    centres, sse = km.cluster_centers_, km.inertia_
    for _ in range(trials):
        trial = centres.copy()
        trial[rng.integers(K)] = lab[rng.integers(len(lab))]
        km = KMeans(K, init=trial, n_init=1, max_iter=100).fit(lab)
        if km.inertia_ < sse:
            centres, sse = km.cluster_centers_, km.inertia_
    return sse


def full_size():
    names = ["astronaut", "chelsea", "coffee", "hubble_deep_field", "immunohistochemistry", "rocket", "retina"]
    for name in names:
        yield name, getattr(skdata, name)()
    bunch = load_sample_images()
    for path, img in zip(bunch.filenames, bunch.images):
        yield os.path.splitext(os.path.basename(path))[0], img


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--starts", type=int, default=300)
    ap.add_argument("--swaps", type=int, default=1000)
    ap.add_argument("--full", action="store_true")
    args = ap.parse_args()
    doc = json.load(open(REF))
    rng = np.random.default_rng(7)
    starts, swaps = [], []
    for p in doc["photos"]:
        rgb = np.asarray(Image.open(os.path.join(ROOT, "fixtures", p["file"])).convert("RGB"))
        lab = rgb2lab(rgb).reshape(-1, 3).astype(np.float64)
        one = p["inertia_n_init_1_mean"]
        a = best_of_starts(lab, args.starts) / one
        b = random_swap(lab, args.swaps, rng) / one
        starts.append(a)
        swaps.append(b)
        print(f"{p['name']:22s} best of {args.starts} starts {a:.4f}   random swap x{args.swaps} {b:.4f}", flush=True)
    print(f"geometric mean: best of {args.starts} starts {gmean(starts):.4f}, random swap {gmean(swaps):.4f}")
    if args.full:
        ratios = []
        for name, img in full_size():
            lab = rgb2lab(np.asarray(img)[:, :, :3]).reshape(-1, 3)
            ins = [KMeans(K, init="k-means++", n_init=1, random_state=s).fit(lab).inertia_ for s in range(10)]
            ratios.append(min(ins) / np.mean(ins))
            print(f"{name:22s} full size {lab.shape[0]} px: best of 10 / mean of 10 {ratios[-1]:.4f}", flush=True)
        print(f"full size, geometric mean: best of 10 / one run {gmean(ratios):.4f}")


if __name__ == "__main__":
    main()
