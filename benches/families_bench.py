#!/usr/bin/env python3
"""Cost of `--objective families` against `--objective plain` in `chromasift reduce`.

Targets:

* quality: on photos, the mean CIEDE2000 of the reduced image (`mean_delta_e2000` in
  `OUT/STEM.palette.json`) with `--objective families` may be at most 3 % above the
  plain k-means result (ratio families / plain <= 1.03). Both the worst photo and the
  geometric mean over the photos are reported and checked;
* speed: the whole `reduce` run on a 12-megapixel photo with `families` may take at most
  1.3 times the plain run's wall time.

One run:

1. builds the release binary (`cargo build --release`) into CARGO_TARGET_DIR (default
   /tmp/bench-target); `--no-lto` builds without whole-program optimisation to save build
   time (the shipped profile uses it); `--commit REV` builds a snapshot of that commit
   (`git archive`) instead of the working tree, so edits in progress are not measured;
2. writes the colour sample images that scikit-image ships (`skimage.data`: astronaut,
   coffee, chelsea, rocket, immunohistochemistry, hubble_deep_field, retina, colorwheel,
   logo, the left image of stereo_motorcycle) as PNG to a temporary folder, and uses the
   12 MP photo of `benches/compare_sklearn.py` (its `make_photo`:
   /tmp/chromasift-bench/coffee-4000x3000-noise2.png, made if missing);
3. runs `reduce PHOTO -k 16 -o DIR --objective plain` and `--objective families`
   (default seed) on each photo and prints, per photo, both mean CIEDE2000 values, their
   ratio, `settings.family_moves` and the number of `lost_areas`;
4. times the 12 MP photo: interleaved whole CLI runs (plain, families, plain, ...,
   --repeats of each, after --warmup untimed runs of each), wall time from
   `time.perf_counter` around the subprocess, median of each, peak RSS from GNU time
   (`/usr/bin/time -v`) when it is installed. Before timing it waits (up to --wait-idle
   seconds) for the 1-minute load average to fall below 0.5 and prints the load it saw.

Usage (from the repository root):
    CARGO_TARGET_DIR=/tmp/bench-target python3 benches/families_bench.py
    CARGO_TARGET_DIR=/tmp/bench-target python3 benches/families_bench.py --no-lto --repeats 3 \
        --json /tmp/families.json
Options: --repeats N (timed runs of each objective, default 5), --warmup N (default 1),
--wait-idle SECONDS (default 60), --no-lto, --commit REV, -k K (default 16, the k of the
target), --photo PATH and --remake-photo (the 12 MP photo), --json FILE (every figure).
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import os
import platform
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
sys.path.insert(0, str(HERE))
import compare_sklearn  # noqa: E402  (make_photo, parse_time_v, Meter)

DEFAULT_K = 16
TARGET_DE_RATIO = 1.03
TARGET_TIME_RATIO = 1.3
IDLE_LOADAVG = 0.5
GNU_TIME = Path("/usr/bin/time")

# The colour samples of skimage.data, with the credit their documentation gives.
SAMPLES = [
    ("astronaut", "Eileen Collins, NASA Great Images database; public domain"),
    ("coffee", "Coffee cup, courtesy of Pikolo Espresso Bar; CC0 by the photographer (Rachel Michetti)"),
    ("chelsea", "Chelsea the cat; CC0 by the photographer (Stefan van der Walt)"),
    ("rocket", "DSCOVR launch on Falcon 9, SpaceX photos; public domain"),
    ("immunohistochemistry", "IHC staining, Center for Microscopy And Molecular Imaging; no known copyright restrictions"),
    ("hubble_deep_field", "Hubble eXtreme Deep Field, NASA (HubbleSite); public domain"),
    ("retina", "Fundus photograph, Wikimedia Commons (Mikael Haggstrom); CC0"),
    ("colorwheel", "colour wheel (synthetic)"),
    ("logo", "scikit-image logo, RGBA"),
    ("stereo_motorcycle", "left image of the pair, Middlebury 2014 stereo dataset, down-sampled by 4"),
]


def log(msg: str) -> None:
    print(f"[families] {msg}", file=sys.stderr, flush=True)


# ---------------------------------------------------------------------------------
# Build
# ---------------------------------------------------------------------------------


def target_dir() -> Path:
    return Path(os.environ.get("CARGO_TARGET_DIR", "/tmp/bench-target"))


def git(*args: str, cwd: Path = REPO) -> str:
    p = subprocess.run(["git", *args], cwd=cwd, capture_output=True, text=True)
    return p.stdout.strip() if p.returncode == 0 else ""


def source_tree(commit: str | None) -> tuple[Path, dict]:
    """The crate to build: the working tree, or a `git archive` snapshot of `commit`."""
    if commit is None:
        dirty = git("status", "--porcelain", "--", "src", "Cargo.toml", "Cargo.lock")
        return REPO, {
            "tree": str(REPO),
            "commit": git("rev-parse", "HEAD"),
            "uncommitted_changes_in_src": bool(dirty),
        }
    sha = git("rev-parse", "--verify", f"{commit}^{{commit}}")
    if not sha:
        raise SystemExit(f"unknown commit {commit!r}")
    snap = Path(tempfile.gettempdir()) / f"chromasift-src-{sha[:12]}"
    if not (snap / "Cargo.toml").exists():
        log(f"snapshot of {sha[:12]} in {snap}")
        snap.mkdir(parents=True, exist_ok=True)
        archive = subprocess.run(["git", "archive", sha], cwd=REPO, capture_output=True, check=True).stdout
        subprocess.run(["tar", "-x", "-C", str(snap)], input=archive, check=True)
    return snap, {"tree": str(snap), "commit": sha, "uncommitted_changes_in_src": False}


def build_release(tree: Path, no_lto: bool) -> tuple[Path, dict]:
    env = dict(os.environ)
    env["CARGO_TARGET_DIR"] = str(target_dir())
    if no_lto:
        env["CARGO_PROFILE_RELEASE_LTO"] = "false"
        env["CARGO_PROFILE_RELEASE_CODEGEN_UNITS"] = "16"
    log(f"cargo build --release in {tree} (target {target_dir()}, {'no LTO' if no_lto else 'LTO as shipped'})")
    t0 = time.perf_counter()
    subprocess.run(["cargo", "build", "--release"], cwd=tree, env=env, check=True)
    binary = target_dir() / "release" / "chromasift"
    version = subprocess.run([str(binary), "--version"], capture_output=True, text=True).stdout.strip()
    return binary, {
        "binary": str(binary),
        "version": version,
        "lto": not no_lto,
        "build_s": round(time.perf_counter() - t0, 1),
        "cargo_build_jobs": os.environ.get("CARGO_BUILD_JOBS"),
    }


# ---------------------------------------------------------------------------------
# Photos
# ---------------------------------------------------------------------------------


def sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def write_samples(folder: Path) -> list[dict]:
    import numpy as np
    import skimage
    from PIL import Image
    from skimage import data

    photos = []
    for name, credit in SAMPLES:
        img = getattr(data, name)()
        if isinstance(img, tuple):  # stereo pair: (left, right, disparity)
            img = img[0]
        img = np.ascontiguousarray(img)
        path = folder / f"{name}.png"
        Image.fromarray(img).save(path)
        photos.append({
            "name": name,
            "path": str(path),
            "width": int(img.shape[1]),
            "height": int(img.shape[0]),
            "channels": int(img.shape[2]),
            "source": f"skimage.data.{name}() (scikit-image {skimage.__version__}): {credit}",
        })
    return photos


def big_photo(path: Path, remake: bool) -> dict:
    import skimage
    from PIL import Image

    if remake or not path.exists():
        log(f"making the 12 MP photo {path} (compare_sklearn.make_photo)")
        made = compare_sklearn.make_photo(path)
        source = f"{made['source']}; {made['processing']}; made now by compare_sklearn.make_photo"
    else:
        source = (
            "skimage.data.coffee() ('Coffee cup', courtesy of Pikolo Espresso Bar, CC0 by the photographer, "
            "Rachel Michetti), made earlier by compare_sklearn.make_photo (centre crop to 4:3, bicubic resize "
            f"to 4000x3000, Gaussian noise sigma 2); scikit-image installed now: {skimage.__version__}"
        )
    with Image.open(path) as im:
        w, h = im.size
    return {
        "name": "coffee-12mp",
        "path": str(path),
        "width": w,
        "height": h,
        "channels": 3,
        "sha256": sha256(path),
        "source": source,
    }


# ---------------------------------------------------------------------------------
# CLI runs
# ---------------------------------------------------------------------------------


def run_reduce(binary: Path, photo: Path, out_dir: Path, k: int, objective: str, measure_memory: bool) -> dict:
    if out_dir.exists():
        shutil.rmtree(out_dir)
    cmd = [str(binary), "reduce", str(photo), "-k", str(k), "-o", str(out_dir), "--objective", objective]
    if measure_memory:
        cmd = [str(GNU_TIME), "-v", *cmd]
    with compare_sklearn.Meter() as m:
        t0 = time.perf_counter()
        p = subprocess.run(cmd, capture_output=True, text=True)
        wall = time.perf_counter() - t0
    if p.returncode != 0:
        raise SystemExit(f"CLI failed ({p.returncode}): {' '.join(cmd)}\n{p.stderr}")
    doc = json.loads((out_dir / f"{photo.stem}.palette.json").read_text())
    r = {
        "wall_s": wall,
        "other_cores": m.other_cores,
        "mean_delta_e2000": doc["mean_delta_e2000"],
        "mean_delta_e76": doc["mean_delta_e76"],
        "sse": doc["sse"],
        "k": doc["k"],
        "iterations": doc["iterations"],
        "objective": doc["settings"].get("objective"),
        "family_moves": doc["settings"].get("family_moves", 0),
        "lost_areas": len(doc.get("lost_areas", [])),
        "lost_area_pixels": sum(a["pixels"] for a in doc.get("lost_areas", [])),
    }
    if measure_memory:
        tv = compare_sklearn.parse_time_v(p.stderr)
        r["peak_rss_mb"] = tv["peak_rss_mb"]
        r["cpu_s"] = tv["cpu_s"]
    shutil.rmtree(out_dir)
    return r


def quality(binary: Path, photos: list[dict], work: Path, k: int) -> list[dict]:
    rows = []
    for ph in photos:
        row = {"photo": ph["name"]}
        for objective in ("plain", "families"):
            log(f"{ph['name']}: --objective {objective}")
            row[objective] = run_reduce(binary, Path(ph["path"]), work / f"q-{ph['name']}-{objective}", k, objective, False)
        row["ratio"] = row["families"]["mean_delta_e2000"] / row["plain"]["mean_delta_e2000"]
        rows.append(row)
    return rows


def wait_quiet(limit_s: float) -> dict:
    """Waits up to limit_s for the 1-minute load average to fall below IDLE_LOADAVG."""
    t0 = time.monotonic()
    first = os.getloadavg()
    while True:
        la = os.getloadavg()
        waited = time.monotonic() - t0
        if la[0] < IDLE_LOADAVG or waited >= limit_s:
            break
        log(f"waiting for a quiet machine: load average {la[0]:.2f} {la[1]:.2f} {la[2]:.2f} ({waited:.0f} s)")
        time.sleep(min(5.0, max(0.1, limit_s - waited)))
    quiet = la[0] < IDLE_LOADAVG
    if not quiet:
        log(f"machine still busy after {waited:.0f} s (load average {la[0]:.2f}); timing anyway")
    return {"loadavg_at_start_of_wait": list(first), "loadavg_before_timing": list(la),
            "waited_s": round(waited, 1), "quiet": quiet}


def timing(binary: Path, photo: Path, work: Path, k: int, repeats: int, warmup: int, wait_s: float) -> dict:
    mem = GNU_TIME.exists()
    if not mem:
        log("/usr/bin/time not found (Debian package `time`): peak memory is not measured")
    res = {"idle": wait_quiet(wait_s), "peak_memory_measured": mem, "warmup_runs": warmup,
           "runs": {"plain": [], "families": []}}
    # Untimed runs first: the first run after a pause is slower (file and CPU caches).
    for i in range(warmup):
        for objective in ("plain", "families"):
            log(f"warm-up {objective} {i + 1}/{warmup}")
            run_reduce(binary, photo, work / f"w-{objective}", k, objective, False)
    for i in range(repeats):
        for objective in ("plain", "families"):
            log(f"timing {objective} {i + 1}/{repeats}")
            res["runs"][objective].append(run_reduce(binary, photo, work / f"t-{objective}", k, objective, mem))
    res["loadavg_after_timing"] = list(os.getloadavg())
    for objective, rs in res["runs"].items():
        s = {
            "median_wall_s": statistics.median(r["wall_s"] for r in rs),
            "wall_all_s": [r["wall_s"] for r in rs],
            "max_other_cores": max(r["other_cores"] for r in rs),
            "mean_delta_e2000_same_every_run": len({r["mean_delta_e2000"] for r in rs}) == 1,
        }
        if mem:
            s["peak_rss_mb"] = max(r["peak_rss_mb"] for r in rs)
            s["median_cpu_s"] = statistics.median(r["cpu_s"] for r in rs)
        res[objective] = s
    res["ratio"] = res["families"]["median_wall_s"] / res["plain"]["median_wall_s"]
    if mem:
        res["cpu_ratio"] = res["families"]["median_cpu_s"] / res["plain"]["median_cpu_s"]
    return res


# ---------------------------------------------------------------------------------
# Machine and report
# ---------------------------------------------------------------------------------


def machine() -> dict:
    cpu = "unknown"
    for line in Path("/proc/cpuinfo").read_text().splitlines():
        if line.startswith("model name"):
            cpu = line.split(":", 1)[1].strip()
            break
    mem_kb = int(re.search(r"MemTotal:\s+(\d+)", Path("/proc/meminfo").read_text()).group(1))
    return {
        "date_utc": datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        "cpu": cpu,
        "cores": os.cpu_count(),
        "memory_gib": round(mem_kb / 1024 / 1024, 1),
        "kernel": platform.release(),
        "python": platform.python_version(),
        "rustc": subprocess.run(["rustc", "--version"], capture_output=True, text=True).stdout.strip(),
    }


def verdict(flag: bool) -> str:
    return "met" if flag else "MISSED"


def report(res: dict) -> str:
    lines = []
    w = lines.append
    m, b, src = res["machine"], res["build"], res["source"]
    w(f"Machine: {m['cpu']}, {m['cores']} cores, {m['memory_gib']} GiB; {m['rustc']}; Python {m['python']}; "
      f"{m['date_utc']}")
    dirty = " + uncommitted changes in src/" if src["uncommitted_changes_in_src"] else ""
    w(f"Binary: {b['version']}, commit {src['commit'][:12]}{dirty}, {'LTO' if b['lto'] else 'no LTO'} "
      f"(built in {b['build_s']} s)")
    w("")
    w("Photos:")
    for ph in res["photos"]:
        w(f"  {ph['name']} ({ph['width']}x{ph['height']}, {ph['channels']} channels): {ph['source']}")
    w("")
    w(f"Mean CIEDE2000 of the reduced image, k = {res['k']}, default seed")
    w("")
    w("| photo | plain | families | ratio | family moves | lost areas plain | lost areas families |")
    w("|---|---:|---:|---:|---:|---:|---:|")
    for r in res["quality"]:
        p, f = r["plain"], r["families"]
        mark = "" if r["ratio"] <= TARGET_DE_RATIO else " **over**"
        w(f"| {r['photo']} | {p['mean_delta_e2000']:.4f} | {f['mean_delta_e2000']:.4f} | {r['ratio']:.4f}{mark} | "
          f"{f['family_moves']} | {p['lost_areas']} | {f['lost_areas']} |")
    q = res["quality_summary"]
    w("")
    w(f"Geometric mean of the ratios over {q['photos']} photos: {q['geomean_ratio']:.4f} "
      f"(target <= {TARGET_DE_RATIO}): {verdict(q['geomean_ratio'] <= TARGET_DE_RATIO)}")
    w(f"Worst ratio: {q['worst_ratio']:.4f} ({q['worst_photo']}) (target <= {TARGET_DE_RATIO} on every photo): "
      f"{verdict(q['worst_ratio'] <= TARGET_DE_RATIO)}")
    if q["over"]:
        w(f"  photos over the target: {', '.join(q['over'])}")
    w(f"Photos where families made moves: {q['photos_with_moves']} of {q['photos']}; photos where both "
      f"objectives gave the same SSE and mean CIEDE2000: {q['photos_same_result']} of {q['photos']}")
    w("")
    t = res["timing"]
    idle = t["idle"]
    la0, la1 = idle["loadavg_before_timing"], t["loadavg_after_timing"]
    w(f"Timing on {res['photos'][-1]['name']}: load average before {la0[0]:.2f} {la0[1]:.2f} {la0[2]:.2f} "
      f"(waited {idle['waited_s']} s; {'quiet' if idle['quiet'] else 'NOT QUIET: speed figures are not valid'}), "
      f"after {la1[0]:.2f} {la1[1]:.2f} {la1[2]:.2f}")
    w("")
    w("| objective | median wall (s) | runs (s) | median CPU (s) | peak RSS (MB) | other load (cores, max) |")
    w("|---|---:|---|---:|---:|---:|")
    for objective in ("plain", "families"):
        s = t[objective]
        runs = ", ".join(f"{x:.2f}" for x in s["wall_all_s"])
        cpu = f"{s['median_cpu_s']:.2f}" if "median_cpu_s" in s else "-"
        rss = f"{s['peak_rss_mb']:.0f}" if "peak_rss_mb" in s else "not measured"
        w(f"| {objective} | {s['median_wall_s']:.2f} | {runs} | {cpu} | {rss} | {s['max_other_cores']:.2f} |")
    w("")
    w(f"Wall time families / plain (medians of {len(t['plain']['wall_all_s'])} interleaved runs each, after "
      f"{t['warmup_runs']} untimed run(s) of each): "
      f"{t['ratio']:.3f} (target <= {TARGET_TIME_RATIO}): {verdict(t['ratio'] <= TARGET_TIME_RATIO)}")
    if "cpu_ratio" in t:
        w(f"  CPU time families / plain: {t['cpu_ratio']:.3f}")
    big = res["quality"][-1]
    for o in ("plain", "families"):
        if any(r["mean_delta_e2000"] != big[o]["mean_delta_e2000"] for r in t["runs"][o]):
            w(f"WARNING: the timed {o} runs gave a mean CIEDE2000 other than the table's")
    return "\n".join(lines)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--repeats", type=int, default=5, help="timed runs of each objective on the 12 MP photo")
    ap.add_argument("--warmup", type=int, default=1, help="untimed runs of each objective before timing")
    ap.add_argument("-k", "--k", type=int, default=DEFAULT_K, help="colours (the target is stated for 16)")
    ap.add_argument("--wait-idle", type=float, default=60.0, metavar="SECONDS",
                    help=f"before timing, wait up to this long for a 1-minute load average below {IDLE_LOADAVG}")
    ap.add_argument("--no-lto", action="store_true", help="build without LTO (faster build, not the shipped profile)")
    ap.add_argument("--commit", metavar="REV", help="build a git-archive snapshot of this commit, not the working tree")
    ap.add_argument("--photo", type=Path, default=compare_sklearn.DEFAULT_PHOTO, help="the 12 MP photo")
    ap.add_argument("--remake-photo", action="store_true")
    ap.add_argument("--json", type=Path, metavar="FILE", help="write every figure as JSON")
    a = ap.parse_args()

    res = {"machine": machine(), "k": a.k}
    tree, res["source"] = source_tree(a.commit)
    binary, res["build"] = build_release(tree, a.no_lto)
    with tempfile.TemporaryDirectory(prefix="chromasift-families-") as tmp:
        work = Path(tmp)
        (work / "photos").mkdir()
        photos = write_samples(work / "photos") + [big_photo(a.photo, a.remake_photo)]
        res["photos"] = photos
        res["quality"] = quality(binary, photos, work, a.k)
        ratios = [r["ratio"] for r in res["quality"]]
        worst = max(res["quality"], key=lambda r: r["ratio"])
        res["quality_summary"] = {
            "photos": len(ratios),
            "geomean_ratio": math.exp(sum(math.log(x) for x in ratios) / len(ratios)),
            "worst_ratio": worst["ratio"],
            "worst_photo": worst["photo"],
            "over": [r["photo"] for r in res["quality"] if r["ratio"] > TARGET_DE_RATIO],
            "photos_with_moves": sum(1 for r in res["quality"] if r["families"]["family_moves"] > 0),
            "photos_same_result": sum(
                1 for r in res["quality"]
                if (r["plain"]["sse"], r["plain"]["mean_delta_e2000"]) == (r["families"]["sse"], r["families"]["mean_delta_e2000"])
            ),
            "target": TARGET_DE_RATIO,
        }
        res["timing"] = timing(binary, a.photo, work, a.k, a.repeats, a.warmup, a.wait_idle)
        res["timing"]["target"] = TARGET_TIME_RATIO
    print(report(res))
    if a.json:
        a.json.write_text(json.dumps(res, indent=2))
        log(f"figures written to {a.json}")


if __name__ == "__main__":
    main()
