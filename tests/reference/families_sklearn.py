"""Plain k-means on the synthetic posters of fixtures/families/: which colour families a
palette of exactly k colours keeps.

For every poster listed in fixtures/families/families.json, and for its .png and its .jpg:
decode with Pillow, convert every pixel to CIELAB (D65) with skimage.color.rgb2lab, run
scikit-learn's KMeans(n_clusters=k, init="k-means++", n_init=1, random_state=s) for
s = 0..9 on all pixels, round each centre to 8-bit sRGB as a palette file would hold it
(lab2rgb, clip, round) and take that colour back to CIELAB. A family is kept when the
CIEDE2000 (skimage.color.deltaE_ciede2000) from its `lab` to the nearest palette colour
is at most 6, and lost otherwise.

Writes fixtures/reference/families_sklearn.json. Run from the repository root:

    pip install scikit-learn scikit-image pillow numpy
    python3 tests/reference/families_sklearn.py
"""
import json
import os
import platform
import sys

import numpy as np
import PIL
import scipy
import skimage
import sklearn
from PIL import Image
from skimage.color import deltaE_ciede2000, lab2rgb, rgb2lab
from sklearn.cluster import KMeans

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
FAMILIES = os.path.join(ROOT, "fixtures", "families")
OUT = os.path.join(ROOT, "fixtures", "reference", "families_sklearn.json")
SEEDS = list(range(10))
KEEP_DE00 = 6.0


def palette_lab(centres_lab):
    """Centres rounded to 8-bit sRGB (as written) and back to CIELAB D65."""
    rgb = np.clip(lab2rgb(centres_lab[None, :, :])[0], 0.0, 1.0)
    rgb8 = np.round(rgb * 255.0).astype(np.uint8)
    return rgb8, rgb2lab(rgb8[None, :, :].astype(np.float64) / 255.0)[0]


def run(path, k, families):
    rgb = np.asarray(Image.open(path).convert("RGB"))
    lab = rgb2lab(rgb).reshape(-1, 3)
    fam_lab = np.array([f["lab"] for f in families], dtype=np.float64)
    per_seed = []
    kept_total = 0
    lost_count = {f["name"]: 0 for f in families}
    for s in SEEDS:
        km = KMeans(n_clusters=k, init="k-means++", n_init=1, random_state=s).fit(lab)
        rgb8, pal = palette_lab(km.cluster_centers_)
        # CIEDE2000 from every family to every palette colour.
        de = deltaE_ciede2000(
            np.repeat(fam_lab[:, None, :], k, axis=1), np.repeat(pal[None, :, :], len(families), axis=0)
        )
        nearest = de.min(axis=1)
        lost = []
        for f, d in zip(families, nearest):
            if d <= KEEP_DE00:
                kept_total += 1
            else:
                lost.append({"name": f["name"], "de00": round(float(d), 3), "small": f["small"]})
                lost_count[f["name"]] += 1
        per_seed.append(
            {
                "seed": s,
                "inertia": round(float(km.inertia_), 1),
                "palette": ["#%02x%02x%02x" % tuple(int(v) for v in c) for c in rgb8],
                "lost": lost,
            }
        )
    # Control: the same Lloyd iterations started at the families' own colours, to show that
    # each family can be held by a k-colour palette on this file.
    km = KMeans(n_clusters=k, init=fam_lab, n_init=1).fit(lab)
    _, pal = palette_lab(km.cluster_centers_)
    de = deltaE_ciede2000(
        np.repeat(fam_lab[:, None, :], k, axis=1), np.repeat(pal[None, :, :], len(families), axis=0)
    ).min(axis=1)
    control = {
        "max_de00": round(float(de.max()), 3),
        "lost": [{"name": f["name"], "de00": round(float(d), 3)} for f, d in zip(families, de) if d > KEEP_DE00],
    }
    total = len(families) * len(SEEDS)
    return {
        "file": os.path.relpath(path, ROOT),
        "seeds": per_seed,
        "control_started_at_families": control,
        "summary": {
            "kept": kept_total,
            "total": total,
            "lost": total - kept_total,
            "seeds_losing_any": sum(1 for r in per_seed if r["lost"]),
            "lost_by_family": {n: c for n, c in lost_count.items() if c},
        },
    }


def main():
    with open(os.path.join(FAMILIES, "families.json")) as fh:
        doc = json.load(fh)
    versions = {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "scikit-learn": sklearn.__version__,
        "scikit-image": skimage.__version__,
        "pillow": PIL.__version__,
    }
    artworks = []
    grand = {"png": [0, 0], "jpg": [0, 0]}
    for a in doc["artworks"]:
        entry = {"name": a["name"], "k": a["k"]}
        for kind in ("png", "jpg"):
            r = run(os.path.join(FAMILIES, a[kind]), a["k"], a["families"])
            entry[kind] = r
            grand[kind][0] += r["summary"]["kept"]
            grand[kind][1] += r["summary"]["total"]
            print(
                "%-16s %s k=%d kept %3d/%3d, seeds losing a family %2d/%d, control max %.1f %s"
                % (
                    a["name"],
                    kind,
                    a["k"],
                    r["summary"]["kept"],
                    r["summary"]["total"],
                    r["summary"]["seeds_losing_any"],
                    len(SEEDS),
                    r["control_started_at_families"]["max_de00"],
                    r["summary"]["lost_by_family"],
                ),
                file=sys.stderr,
            )
        artworks.append(entry)
    out = {
        "source": "scikit-learn %s KMeans (k-means++ seeding, n_init=1, Lloyd) on CIELAB from scikit-image %s "
        "rgb2lab (D65); CIEDE2000 by scikit-image deltaE_ciede2000; images decoded with Pillow %s; "
        "posters and their families from fixtures/families/families.json (invented scenes)"
        % (sklearn.__version__, skimage.__version__, PIL.__version__),
        "versions": versions,
        "regenerate": "python3 tests/reference/families_sklearn.py",
        "method": {
            "seeds": SEEDS,
            "kmeans": "KMeans(n_clusters=k, init='k-means++', n_init=1, random_state=seed) on all pixels",
            "palette": "centres -> lab2rgb -> clip to [0, 1] -> round(255 v) -> rgb2lab",
            "kept": "CIEDE2000 from the family's lab to the nearest palette colour <= %g" % KEEP_DE00,
            "control_started_at_families": "KMeans(n_clusters=k, init=<the families' lab>, n_init=1): "
            "Lloyd started at the right colours, to show the families can be held on each file",
        },
        "summary": {kind: {"kept": v[0], "total": v[1]} for kind, v in grand.items()},
        "artworks": artworks,
    }
    with open(OUT, "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")
    print("wrote %s" % os.path.relpath(OUT, ROOT), file=sys.stderr)


if __name__ == "__main__":
    main()
