"""Speed of choosing K and of annealing, against a single `reduce`.

    cargo build --release
    python3 benches/choose_bench.py [--photo PATH] [--roll DIR --roll-count 6]

On the 12-megapixel photo made by benches/compare_sklearn.py (skimage coffee, CC0,
4000 x 3000 with seeded noise; default /tmp/chromasift-bench/coffee-4000x3000-noise2.png):

* `reduce -k 16` (plain), `sweep --k 2..16`, `reduce -k 16 --anneal`: wall time
  (median of --repeats runs). Targets (issue: choosing K and beta): sweep under 4x the
  plain run, anneal under 3x.
* SSE of `--anneal` against plain k-means++ given the same time: `--restarts R` with R
  the number of k-means++ starts that fit in the annealing run's time (the cost of one
  more start is measured; see compare_anneal), and against a single start.

The same SSE comparison is repeated on the first --roll-count photos of the batch
benchmark's roll (benches/batch_bench.py), so "most images" can be counted.
`--candidate '--split-merge 32'` compares other flags than `--anneal` the same way.
"""
import argparse
import json
import os
import re
import shlex
import statistics
import subprocess
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(os.environ.get("CARGO_TARGET_DIR") or os.path.join(ROOT, "target"), "release", "chromasift")


def run(args):
    out = tempfile.mkdtemp(prefix="chromasift-choose-")
    t = time.perf_counter()
    r = subprocess.run([BIN] + args + ["-o", out], capture_output=True, text=True)
    dt = time.perf_counter() - t
    if r.returncode != 0:
        raise SystemExit(f"failed: {args}\n{r.stderr}")
    return dt, out, r.stderr


def sse_of(out):
    for f in os.listdir(out):
        if f.endswith(".palette.json"):
            with open(os.path.join(out, f)) as fh:
                return json.load(fh)["sse"]
    raise SystemExit("no palette.json")


def compare_anneal(image, repeats=1, candidate=("--anneal",)):
    """Annealing (or the `--candidate` flags) against k-means++ restarts given the same
    wall time.

    Restarts share the decode, histogram and output work, so R restarts cost far less than
    R plain runs. The cost of one more restart is measured (`--restarts 5` against a plain
    run, over 4 extra starts) and R is the number of starts that fit in the annealing run's
    time; the R-restart run's own time is printed so the budget can be checked.
    """
    t_plain = statistics.median(run(["reduce", image, "-k", "16"])[0] for _ in range(repeats))
    t_ann, out_a, _ = run(["reduce", image, "-k", "16", *candidate])
    t_five = statistics.median(run(["reduce", image, "-k", "16", "--restarts", "5"])[0]
                               for _ in range(repeats))
    per_start = max((t_five - t_plain) / 4, 1e-3)
    r = max(1, min(500, 1 + int((t_ann - t_plain) // per_start)))
    t_r, out_r, _ = run(["reduce", image, "-k", "16", "--restarts", str(r)])
    return {"plain_s": round(t_plain, 3), "anneal_s": round(t_ann, 3), "restarts": r,
            "restarts_s": round(t_r, 3), "anneal_sse": sse_of(out_a),
            "restarts_sse": sse_of(out_r), "plain_sse": sse_of(run(["reduce", image, "-k", "16"])[1])}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--photo", default="/tmp/chromasift-bench/coffee-4000x3000-noise2.png")
    ap.add_argument("--roll", default="/tmp/chromasift-bench/roll200")
    ap.add_argument("--roll-count", type=int, default=6)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--candidate", default="--anneal",
                    help="flags compared with equal-time restarts, e.g. '--split-merge 32'")
    a = ap.parse_args()
    res = {}
    med = lambda args: statistics.median(run(args)[0] for _ in range(a.repeats))
    res["reduce_k16_s"] = round(med(["reduce", a.photo, "-k", "16"]), 3)
    res["sweep_2_16_s"] = round(med(["sweep", a.photo, "--k", "2..16"]), 3)
    res["anneal_k16_s"] = round(med(["reduce", a.photo, "-k", "16", "--anneal"]), 3)
    res["sweep_ratio"] = round(res["sweep_2_16_s"] / res["reduce_k16_s"], 2)
    res["anneal_ratio"] = round(res["anneal_k16_s"] / res["reduce_k16_s"], 2)
    print(f"reduce -k 16        {res['reduce_k16_s']:.2f} s")
    print(f"sweep --k 2..16     {res['sweep_2_16_s']:.2f} s  ({res['sweep_ratio']}x; target < 4x)")
    print(f"reduce --anneal     {res['anneal_k16_s']:.2f} s  ({res['anneal_ratio']}x; target < 3x)")
    images = [a.photo]
    if os.path.isdir(a.roll):
        images += sorted(os.path.join(a.roll, f) for f in os.listdir(a.roll)
                         if f.endswith(".jpg"))[: a.roll_count]
    wins = 0
    wins_single = 0
    res["anneal_vs_restarts"] = []
    for im in images:
        c = compare_anneal(im, candidate=tuple(shlex.split(a.candidate)))
        c["image"] = os.path.basename(im)
        better = c["anneal_sse"] < c["restarts_sse"]
        wins += better
        wins_single += c["anneal_sse"] < c["plain_sse"]
        res["anneal_vs_restarts"].append(c)
        print(f"{c['image']:34s} {a.candidate} {c['anneal_s']:.2f} s SSE {c['anneal_sse']:.5e}; "
              f"{c['restarts']} restart(s) {c['restarts_s']:.2f} s SSE {c['restarts_sse']:.5e}; "
              f"one start SSE {c['plain_sse']:.5e}: {'candidate lower' if better else 'restarts lower or equal'}")
    res["anneal_lower_on"] = f"{wins}/{len(images)}"
    res["anneal_lower_than_one_start_on"] = f"{wins_single}/{len(images)}"
    print(f"{a.candidate} reached a lower SSE on {wins} of {len(images)} images at the same time budget")
    print(f"{a.candidate} reached a lower SSE than a single k-means++ start on {wins_single} of {len(images)} images")
    print(json.dumps(res))


if __name__ == "__main__":
    main()
