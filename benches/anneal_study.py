"""Does deterministic annealing beat k-means++ restarts on photographs? An independent check.

    python3 benches/anneal_study.py [--images PATH ...] [--seeds 10]

Written outside our Rust code on purpose: a plain NumPy implementation of mass-constrained
deterministic annealing (Rose 1998, "Deterministic annealing for clustering, compression,
classification, regression, and related optimization problems", Proc. IEEE 86(11), sec.
III: codevector masses p_j, p(y_j|x) proportional to p_j exp(-|x - y_j|^2 / T), a codevector
split when T falls below its critical temperature 2 lambda_max(C_{x|y_j}), K capped), polished
by scikit-learn's Lloyd KMeans, against scikit-learn KMeans with k-means++ (n_init=1) for
several random_state values, all on the image's weighted CIELAB histogram (scikit-image
rgb2lab, exact distinct colours and counts), K = 16.

For speed the annealing runs on weighted centroids of 1 Delta E*ab grid cells (the polish and
every SSE use the full histogram). Defaults: the first frames of the batch benchmark's roll
(benches/batch_bench.py). Prints, per image, the annealed SSE and the minimum and median
SSE of the k-means++ runs.
"""
import argparse
import os
import time

import numpy as np
from skimage import color, io
from sklearn.cluster import KMeans

K = 16


def histogram_lab(path):
    im = io.imread(path)[:, :, :3]
    key = (im[:, :, 0].astype(np.uint32) << 16) | (im[:, :, 1].astype(np.uint32) << 8) | im[:, :, 2]
    u, c = np.unique(key.ravel(), return_counts=True)
    rgb = np.stack([(u >> 16) & 255, (u >> 8) & 255, u & 255], 1).astype(np.uint8)[None]
    return color.rgb2lab(rgb)[0], c.astype(float)


def coarsen(x, w, cell):
    key = np.floor(x / cell).astype(np.int64)
    key -= key.min(0)
    flat = (key[:, 0] * 100_000 + key[:, 1]) * 100_000 + key[:, 2]
    _, inv = np.unique(flat, return_inverse=True)
    ws = np.bincount(inv, w)
    xs = np.stack([np.bincount(inv, w * x[:, j]) for j in range(3)], 1) / ws[:, None]
    return xs, ws


def sse(x, w, means):
    return float((w * ((x[:, None, :] - means[None]) ** 2).sum(-1).min(1)).sum())


def mass_constrained_da(x, w, k, alpha=0.9, t_min_frac=1e-4, iters=50, tol=1e-8, perturb=1e-2):
    p_x = w / w.sum()
    mu = (p_x[:, None] * x).sum(0)
    lam = np.linalg.eigvalsh(((x - mu).T * p_x) @ (x - mu))[-1]
    y, p = mu[None].copy(), np.array([1.0])
    t, t_min = 2 * lam * 1.05, 2 * lam * t_min_frac
    while True:
        for _ in range(iters):
            a = np.log(p)[None] - ((x[:, None, :] - y[None]) ** 2).sum(-1) / t
            a -= a.max(1, keepdims=True)
            r = np.exp(a)
            r /= r.sum(1, keepdims=True)
            rp = r * p_x[:, None]
            p_new = rp.sum(0)
            y_new = (rp.T @ x) / p_new[:, None]
            moved = ((y_new - y) ** 2).sum()
            y, p = y_new, p_new
            if moved < tol * lam:
                break
        if t <= t_min:
            return y
        if len(y) < k:
            critical = []
            for j in range(len(y)):
                z = x - y[j]
                l, v = np.linalg.eigh((z.T * rp[:, j]) @ z / p[j])
                if t < 2 * l[-1]:
                    critical.append((p[j] * l[-1], j, v[:, -1], l[-1]))
            critical.sort(key=lambda c: -c[0])
            for _, j, v, l in critical[: k - len(y)]:
                d = perturb * np.sqrt(l) * v
                y = np.vstack([y, y[j] + d])
                y[j] -= d
                p = np.append(p, p[j] / 2)
                p[j] /= 2
        t *= alpha


def main():
    ap = argparse.ArgumentParser()
    roll = "/tmp/chromasift-bench/roll200"
    ap.add_argument("--images", nargs="*",
                    default=[os.path.join(roll, f"frame{i:04d}.jpg") for i in range(4)])
    ap.add_argument("--seeds", type=int, default=10)
    a = ap.parse_args()
    print(f"{'image':<14} {'rows':>7} {'annealed SSE':>13} {'k-means++ min':>14} {'median':>12}  ratio to min, median")
    for path in a.images:
        x, w = histogram_lab(path)
        runs = [sse(x, w, KMeans(K, n_init=1, random_state=s, tol=0, max_iter=500)
                    .fit(x, sample_weight=w).cluster_centers_) for s in range(a.seeds)]
        t0 = time.time()
        xc, wc = coarsen(x, w, 1.0)
        y = mass_constrained_da(xc, wc, K)
        polished = KMeans(K, init=y, n_init=1, tol=0, max_iter=500).fit(x, sample_weight=w)
        s = sse(x, w, polished.cluster_centers_)
        lo, med = min(runs), float(np.median(runs))
        print(f"{os.path.basename(path):<14} {len(x):>7} {s:>13.4e} {lo:>14.4e} {med:>12.4e}  "
              f"{s / lo:.3f}, {s / med:.3f}  ({time.time() - t0:.0f} s annealing)", flush=True)


if __name__ == "__main__":
    main()
