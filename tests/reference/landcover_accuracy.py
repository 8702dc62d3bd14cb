#!/usr/bin/env python3
"""Reference figures for `landcover-assess` (tests/landcover_assess.rs).

Writes fixtures/reference/landcover_accuracy.json:

1. `scene`: an invented 24 x 18 class raster (clusters 1..5, 0 = nodata) and a reference
   raster (labels 1..4, 0 = no reference) on one grid (UTM 33N, 30 m pixels), plus 80
   reference points (pixel centres, a few outside the raster), with scikit-learn's figures:
   the contingency table, the Hungarian matching (scipy.optimize.linear_sum_assignment,
   maximising agreement; clusters left over take their majority label), the majority
   matching, confusion_matrix, cohen_kappa_score and adjusted_rand_score.
2. `olofsson`: the numerical example of Olofsson et al. (2014, Remote Sensing of
   Environment 148:42-57, section 5): sample counts per map stratum and the map's pixel
   counts, the estimates recomputed here from those counts with the paper's equations, and
   the published figures as recalled from memory (`recalled`), checked against the
   recomputation below. The counts themselves are also recalled from memory; that the
   recomputation reproduces the recalled published estimates to the digit is the check
   that counts and results belong together.

Run from the repository root: python3 tests/reference/landcover_accuracy.py
"""

import json
import sys

import numpy as np
import scipy
import sklearn
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score, cohen_kappa_score, confusion_matrix
from sklearn.metrics.cluster import contingency_matrix

W, H = 24, 18
ORIGIN = (600000.0, 4500000.0)
PIXEL = 30.0


def make_scene():
    rng = np.random.default_rng(24)
    # Reference: four labels in bands and a block.
    ref = np.zeros((H, W), dtype=np.int64)
    yy, xx = np.mgrid[0:H, 0:W]
    ref[:] = 1
    ref[xx >= 8] = 2
    ref[(xx >= 16)] = 3
    ref[(yy >= 11) & (xx >= 5) & (xx < 19)] = 4
    # Clusters: label l -> cluster perm[l]; label 2 split into two clusters; noise.
    perm = {1: 3, 2: 1, 3: 5, 4: 2}
    cls = np.vectorize(perm.get)(ref)
    cls[(ref == 2) & (yy < 4)] = 4
    flip = rng.random((H, W)) < 0.12
    cls[flip] = rng.integers(1, 6, size=flip.sum())
    # Nodata in the class raster, no reference in some pixels.
    cls[0, :3] = 0
    ref_out = ref.copy()
    ref_out[rng.random((H, W)) < 0.08] = 0
    return cls.astype(int), ref_out.astype(int)


def matchings(clusters, labels):
    """Hungarian (leftover clusters by majority) and majority, as cluster -> label."""
    cl = sorted(set(clusters))
    lb = sorted(set(labels))
    table = contingency_matrix(clusters, labels)  # rows: sorted clusters, cols: sorted labels
    rows, cols = linear_sum_assignment(table, maximize=True)
    hung = {}
    for r, c in zip(rows, cols):
        if table[r, c] > 0:
            hung[cl[r]] = lb[c]
    # Ties in the majority would make the choice arbitrary: the data must have none.
    maj = {}
    for r, c in enumerate(cl):
        best = np.flatnonzero(table[r] == table[r].max())
        assert len(best) == 1, f"tie in cluster {c}"
        maj[c] = lb[best[0]]
    for c in cl:
        hung.setdefault(c, maj[c])
    return table, hung, maj


def figures(clusters, labels):
    table, hung, maj = matchings(clusters, labels)
    out = {
        "contingency": table.tolist(),
        "clusters": sorted(set(int(c) for c in clusters)),
        "labels": sorted(set(int(l) for l in labels)),
        "adjusted_rand_score": adjusted_rand_score(labels, clusters),
    }
    for name, m in (("hungarian", hung), ("majority", maj)):
        mapped = [m[c] for c in clusters]
        lab = sorted(set(labels))
        out[name] = {
            "cluster_to_label": {str(k): int(v) for k, v in sorted(m.items())},
            # scikit-learn: rows = reference (y_true), columns = map (y_pred).
            "confusion_matrix_true_rows": confusion_matrix(labels, mapped, labels=lab).tolist(),
            "cohen_kappa_score": cohen_kappa_score(labels, mapped),
            "accuracy": float(np.mean(np.array(labels) == np.array(mapped))),
        }
    return out


def olofsson():
    # Section 5 numerical example (recalled): strata = map classes
    # deforestation, forest gain, stable forest, stable non-forest; rows = map, cols = reference.
    counts = np.array(
        [[66, 0, 5, 4], [0, 55, 8, 12], [1, 0, 153, 11], [2, 1, 9, 313]], dtype=float
    )
    mapped_pixels = np.array([200000, 150000, 3200000, 6450000], dtype=float)
    total = mapped_pixels.sum()
    w = mapped_pixels / total
    n_i = counts.sum(axis=1)
    p = w[:, None] * counts / n_i[:, None]
    area = p.sum(axis=0) * total
    share = counts / n_i[:, None]
    var_p = (w[:, None] ** 2 * share * (1 - share) / (n_i[:, None] - 1)).sum(axis=0)
    se = np.sqrt(var_p) * total
    ua = np.diag(share)
    pa = np.diag(p) / p.sum(axis=0)
    oa = np.trace(p)
    # Producer's accuracy variance (their eq. 7).
    q = len(w)
    nj_hat = p.sum(axis=0) * total
    pa_ci = []
    for j in range(q):
        a = mapped_pixels[j] ** 2 * (1 - pa[j]) ** 2 * ua[j] * (1 - ua[j]) / (n_i[j] - 1)
        b = pa[j] ** 2 * sum(
            mapped_pixels[i] ** 2 * share[i, j] * (1 - share[i, j]) / (n_i[i] - 1)
            for i in range(q)
            if i != j
        )
        pa_ci.append(1.96 * np.sqrt((a + b) / nj_hat[j] ** 2))
    ua_ci = 1.96 * np.sqrt(ua * (1 - ua) / (n_i - 1))
    oa_ci = 1.96 * np.sqrt((w**2 * ua * (1 - ua) / (n_i - 1)).sum())
    recalled = {
        "note": "published figures as recalled from memory (Olofsson et al. 2014, section 5); "
        "each is checked against the recomputation from the counts in this script",
        "deforestation_area_pixels": 235086,
        "deforestation_area_ci95_pixels": 68418,
        "deforestation_area_ha": 21158,
        "deforestation_area_ci95_ha": 6158,
        "deforestation_users_accuracy": 0.88,
        "deforestation_producers_accuracy": 0.75,
        "deforestation_users_accuracy_ci95": 0.07,
        "deforestation_producers_accuracy_ci95": 0.21,
        "overall_accuracy": 0.95,
    }
    # The recalled figures agree with the recomputation (30 m pixels: 0.09 ha).
    assert round(area[0]) == recalled["deforestation_area_pixels"], area[0]
    assert round(1.96 * se[0]) == recalled["deforestation_area_ci95_pixels"], se[0]
    assert round(area[0] * 0.09) == recalled["deforestation_area_ha"]
    assert round(1.96 * se[0] * 0.09) == recalled["deforestation_area_ci95_ha"]
    assert round(ua[0], 2) == recalled["deforestation_users_accuracy"]
    assert round(pa[0], 2) == recalled["deforestation_producers_accuracy"]
    assert round(oa, 2) == recalled["overall_accuracy"]
    assert round(ua_ci[0], 2) == recalled["deforestation_users_accuracy_ci95"]
    assert round(pa_ci[0], 2) == recalled["deforestation_producers_accuracy_ci95"]
    return {
        "labels": ["deforestation", "forest gain", "stable forest", "stable non-forest"],
        "counts": counts.astype(int).tolist(),
        "mapped_pixels": mapped_pixels.astype(int).tolist(),
        "computed": {
            "area_pixels": area.tolist(),
            "area_ci95_pixels": (1.96 * se).tolist(),
            "users_accuracy": ua.tolist(),
            "users_accuracy_ci95": ua_ci.tolist(),
            "producers_accuracy": pa.tolist(),
            "producers_accuracy_ci95": pa_ci,
            "overall_accuracy": oa,
            "overall_accuracy_ci95": oa_ci,
        },
        "recalled": recalled,
    }


def main():
    cls, ref = make_scene()
    valid = (cls > 0) & (ref > 0)
    scene = {
        "width": W,
        "height": H,
        "origin": ORIGIN,
        "pixel_m": PIXEL,
        "classes": cls.ravel().tolist(),
        "reference": ref.ravel().tolist(),
        "class_pixels": {str(c): int((cls == c).sum()) for c in range(1, 6)},
        "raster": figures(cls[valid].tolist(), ref[valid].tolist()),
    }
    # Points: 80 seeded pixel centres with a valid class, labelled from the noiseless
    # reference, plus 3 outside the raster.
    rng = np.random.default_rng(7)
    idx = rng.choice(np.flatnonzero((cls.ravel() > 0) & (ref.ravel() > 0)), 80, replace=False)
    pts = []
    for i in sorted(idx):
        y, x = divmod(int(i), W)
        pts.append([ORIGIN[0] + (x + 0.5) * PIXEL, ORIGIN[1] - (y + 0.5) * PIXEL, int(ref.ravel()[i])])
    outside = [[ORIGIN[0] - 10.0, ORIGIN[1] - 45.0, 1], [ORIGIN[0] + 45.0, ORIGIN[1] + 5.0, 2],
               [ORIGIN[0] + W * PIXEL + 1.0, ORIGIN[1] - 100.0, 3]]
    scene["points"] = pts + outside
    pc = [int(cls.ravel()[int(i)]) for i in sorted(idx)]
    pl = [p[2] for p in pts]
    scene["points_figures"] = figures(pc, pl)
    out = {
        "source": "tests/reference/landcover_accuracy.py",
        "versions": {
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
        },
        "scene": scene,
        "olofsson": olofsson(),
    }
    with open("fixtures/reference/landcover_accuracy.json", "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
