#!/usr/bin/env python3
"""The global refinement against scikit-learn: Centroid Index, time and SSE.

Three blocks, each reporting the machine's other load (cores busy apart from this
script) before and after; figures taken under load are indications only.

1. Generated 2-D Gaussian sets (tests/support/gauss.rs, 12 sets x --seeds seeds): the
   bench binary `refine_study` fits each with the default engine, with the refinement
   off (`none`), and with 10 k-means++ starts and no refinement (`none*10`, what
   `--restarts 10` did before), and dumps every set as CSV; then scikit-learn
   KMeans(n_clusters=k, init="k-means++", n_init=10, random_state=seed) fits the same
   points (2 threads). Table: Centroid Index (Fränti, Rezaei & Zhao 2014) per set summed
   over seeds, and time per fit.
2. Photographs of fixtures/photos at K = 16: SSE of the engine and of `reduce` over the mean
   of ten scikit-learn k-means++ runs (fixtures/reference/engine_sklearn.json).
3. The 12-megapixel photo of benches/compare_sklearn.py (make_photo; cached at
   /tmp/chromasift-bench/coffee-4000x3000-noise2.png): wall time of the whole
   `chromasift reduce -k 16` (release binary, median of --repeats) against
   skimage.color.rgb2lab + KMeans(16, k-means++, n_init=1) on the same pixels.

Usage, from the repository root (the release build without LTO is fine for measuring):

    CARGO_PROFILE_RELEASE_LTO=false CARGO_PROFILE_RELEASE_CODEGEN_UNITS=16 \\
    CARGO_PROFILE_BENCH_LTO=false CARGO_PROFILE_BENCH_CODEGEN_UNITS=16 \\
    CARGO_TARGET_DIR=/tmp/bench-target python3 benches/refine_sklearn.py [--seeds 5] \\
        [--repeats 3] [--skip-12mp] [--json FILE]
"""

from __future__ import annotations

import argparse
import glob
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
PHOTO = Path("/tmp/chromasift-bench/coffee-4000x3000-noise2.png")
TARGET_12MP_SPEEDUP = 8.0


def other_load() -> float:
    with open("/proc/loadavg") as f:
        return float(f.read().split()[0])


def cargo_env():
    env = dict(os.environ)
    env.setdefault("CARGO_TARGET_DIR", "/tmp/bench-target")
    return env


def build(env):
    subprocess.run(["cargo", "build", "--release", "-j", "2"], cwd=REPO, env=env, check=True)
    out = subprocess.run(
        ["cargo", "bench", "-j", "2", "--bench", "refine_study", "--no-run", "--message-format=json"],
        cwd=REPO, env=env, check=True, capture_output=True, text=True,
    ).stdout
    study = None
    for line in out.splitlines():
        try:
            msg = json.loads(line)
        except json.JSONDecodeError:
            continue
        if msg.get("reason") == "compiler-artifact" and msg.get("target", {}).get("name") == "refine_study":
            study = msg.get("executable") or study
    return Path(env["CARGO_TARGET_DIR"]) / "release" / "chromasift", study


def centroid_index(a, b):
    import numpy as np

    def orphans(x, y):
        d = ((x[:, None, :] - y[None, :, :]) ** 2).sum(-1)
        hit = np.zeros(len(y), bool)
        hit[d.argmin(1)] = True
        return int((~hit).sum())

    return max(orphans(a, b), orphans(b, a))


def sets_block(study, seeds, out):
    import numpy as np
    from sklearn.cluster import KMeans
    from threadpoolctl import threadpool_limits

    tmp = tempfile.mkdtemp(prefix="refine-sets-")
    load0 = other_load()
    res = subprocess.run(
        [study, "--seeds", str(seeds), "--variants", "default,none,none*10", "--dump", tmp,
         "--json", f"{tmp}/engine.json"],
        check=True, capture_output=True, text=True,
    )
    print(res.stdout)
    engine = json.load(open(f"{tmp}/engine.json"))["runs"]
    table = {}
    for r in engine:
        t = table.setdefault(r["set"], {})
        ci, secs = t.get(r["variant"], (0, 0.0))
        t[r["variant"]] = (ci + r["ci"], secs + r["seconds"])
    with threadpool_limits(limits=2):
        for path in sorted(glob.glob(f"{tmp}/*-s*.csv")):
            if path.endswith(".centres.csv"):
                continue
            stem = Path(path).stem
            name, seed = stem.rsplit("-s", 1)
            x = np.loadtxt(path, delimiter=",")
            c = np.loadtxt(path[:-4] + ".centres.csv", delimiter=",")
            t0 = time.perf_counter()
            km = KMeans(n_clusters=len(c), init="k-means++", n_init=10, random_state=int(seed)).fit(x)
            dt = time.perf_counter() - t0
            t = table.setdefault(name, {})
            ci, secs = t.get("sklearn n_init=10", (0, 0.0))
            t["sklearn n_init=10"] = (ci + centroid_index(km.cluster_centers_, c), secs + dt)
    load1 = other_load()
    cols = ["default", "none", "none*10", "sklearn n_init=10"]
    print(f"\nCentroid Index summed over {seeds} seeds, and mean time per fit (ms)")
    print(f"{'set':<18}" + "".join(f"{c:>22}" for c in cols))
    totals = {c: [0, 0.0, 0] for c in cols}
    for name, t in table.items():
        print(f"{name:<18}" + "".join(f"{t[c][0]:>12}{1000 * t[c][1] / seeds:>8.1f}ms" for c in cols))
        for c in cols:
            totals[c][0] += t[c][0]
            totals[c][1] += t[c][1]
            totals[c][2] += int(t[c][0] > 0)
    print(f"{'CI sum':<18}" + "".join(f"{totals[c][0]:>22}" for c in cols))
    print(f"{'sets with CI>0':<18}" + "".join(f"{totals[c][2]:>22}" for c in cols))
    print(f"{'total time s':<18}" + "".join(f"{totals[c][1]:>22.3f}" for c in cols))
    ratio = totals["sklearn n_init=10"][1] / totals["default"][1]
    print(f"default is {ratio:.1f}x faster than sklearn n_init=10 (load {load0:.2f} -> {load1:.2f})")
    out["sets"] = {"seeds": seeds, "table": table, "totals": totals, "speedup_vs_sklearn_n_init_10": ratio,
                   "load": [load0, load1]}


def photos_block(study, out):
    load0 = other_load()
    res = subprocess.run([study, "--photos", "--seeds", "3", "--variants", "default,none,none*10"],
                         check=True, capture_output=True, text=True)
    load1 = other_load()
    print(res.stdout)
    print(f"(load {load0:.2f} -> {load1:.2f})")
    out["photos"] = {"table": res.stdout, "load": [load0, load1]}


def photo_12mp_block(binary, repeats, out):
    import numpy as np
    from PIL import Image
    from skimage.color import rgb2lab
    from sklearn.cluster import KMeans
    from threadpoolctl import threadpool_limits

    if not PHOTO.exists():
        sys.path.insert(0, str(REPO / "benches"))
        import compare_sklearn  # noqa: E402

        compare_sklearn.make_photo(PHOTO)
    times = []
    load0 = other_load()
    for _ in range(repeats):
        d = tempfile.mkdtemp(prefix="refine-12mp-")
        t0 = time.perf_counter()
        subprocess.run([str(binary), "reduce", str(PHOTO), "-k", "16", "-o", d], check=True,
                       capture_output=True)
        times.append(time.perf_counter() - t0)
        doc = json.load(open(glob.glob(f"{d}/*.palette.json")[0]))
    ours = statistics.median(times)
    rgb = np.asarray(Image.open(PHOTO).convert("RGB"))
    with threadpool_limits(limits=2):
        t0 = time.perf_counter()
        lab = rgb2lab(rgb).reshape(-1, 3)
        t_lab = time.perf_counter() - t0
        t0 = time.perf_counter()
        km = KMeans(n_clusters=16, init="k-means++", n_init=1, random_state=0).fit(lab)
        t_fit = time.perf_counter() - t0
    load1 = other_load()
    speedup = (t_lab + t_fit) / ours
    print(f"12 MP reduce: {ours:.2f} s (median of {repeats}: {', '.join(f'{t:.2f}' for t in times)}), "
          f"SSE {doc['sse']:.6e}")
    print(f"rgb2lab + KMeans(n_init=1): {t_lab:.2f} + {t_fit:.2f} s, inertia {km.inertia_:.6e}")
    print(f"speed-up {speedup:.1f}x (target >= {TARGET_12MP_SPEEDUP}x: "
          f"{'met' if speedup >= TARGET_12MP_SPEEDUP else 'MISSED'}); SSE ratio {doc['sse'] / km.inertia_:.4f}; "
          f"load {load0:.2f} -> {load1:.2f}")
    out["photo_12mp"] = {"reduce_seconds": times, "rgb2lab_seconds": t_lab, "fit_seconds": t_fit,
                         "speedup": speedup, "sse": doc["sse"], "inertia": float(km.inertia_),
                         "load": [load0, load1]}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--skip-12mp", action="store_true")
    ap.add_argument("--json")
    a = ap.parse_args()
    import sklearn

    env = cargo_env()
    binary, study = build(env)
    out = {"machine": {"cores": os.cpu_count(), "platform": platform.platform(),
                       "python": platform.python_version(), "scikit-learn": sklearn.__version__}}
    print(f"machine: {out['machine']}")
    sets_block(study, a.seeds, out)
    photos_block(study, out)
    if not a.skip_12mp:
        photo_12mp_block(binary, a.repeats, out)
    if a.json:
        Path(a.json).write_text(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
