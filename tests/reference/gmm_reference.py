#!/usr/bin/env python3
"""Reference values for the full-covariance Gaussian mixture of `sweep` (src/cluster/mixture.rs).

Writes fixtures/reference/gmm_sklearn.json: small weighted data sets of our own (seeded
draws rounded to whole or half units, so f32 holds them exactly, then counted into distinct
rows with weights), the starting means, and what scikit-learn's GaussianMixture
(covariance_type="full") reaches from the same start: the total log-likelihood, the BIC and
the fitted parameters. Also adjusted Rand indices from sklearn.metrics.adjusted_rand_score.

Same start on both sides: every distinct row goes to its nearest starting mean; the
starting weights, means and covariances are those of that hard partition (weighted by the
counts), with the covariance floor added to the diagonal. scikit-learn receives them as
weights_init, means_init and precisions_init (so its own k-means start is not used), and
reg_covar = the floor, which it adds to the diagonal after every M-step as the Rust side
does. GaussianMixture has no sample weights, so each distinct row is repeated by its count.

Run from the repository root: python3 tests/reference/gmm_reference.py
"""
import json
import platform

import numpy as np
import sklearn
from sklearn.cluster import KMeans
from sklearn.metrics import adjusted_rand_score
from sklearn.mixture import GaussianMixture

OUT = "fixtures/reference/gmm_sklearn.json"


def weighted_unique(x):
    rows, counts = np.unique(x, axis=0, return_counts=True)
    return rows, counts.astype(float)


def hard_start(rows, w, means, floor):
    d2 = ((rows[:, None, :] - means[None, :, :]) ** 2).sum(axis=2)
    labels = d2.argmin(axis=1)
    k, d = means.shape
    n = np.array([w[labels == j].sum() for j in range(k)]) + 10 * np.finfo(float).eps
    weights = n / n.sum()
    mu = np.array([(w[labels == j, None] * rows[labels == j]).sum(axis=0) / n[j] for j in range(k)])
    covs = []
    for j in range(k):
        diff = rows[labels == j] - mu[j]
        c = (w[labels == j, None] * diff).T @ diff / n[j]
        covs.append(c + floor * np.eye(d))
    return weights, mu, np.array(covs)


def case(name, x, k, floor, seed):
    rows, w = weighted_unique(x)
    km = KMeans(n_clusters=k, n_init=1, random_state=seed).fit(rows, sample_weight=w)
    start = km.cluster_centers_
    weights, mu, covs = hard_start(rows, w, start, floor)
    rep = np.repeat(rows, w.astype(int), axis=0)
    gm = GaussianMixture(
        n_components=k,
        covariance_type="full",
        reg_covar=floor,
        tol=1e-10,
        max_iter=20000,
        weights_init=weights,
        means_init=mu,
        precisions_init=np.array([np.linalg.inv(c) for c in covs]),
    ).fit(rep)
    return {
        "name": name,
        "k": k,
        "dim": rows.shape[1],
        "covariance_floor": floor,
        "rows": rows.tolist(),
        "weights": w.tolist(),
        "start_means": start.tolist(),
        "n": float(w.sum()),
        "log_likelihood": float(gm.score(rep) * rep.shape[0]),
        "bic": float(gm.bic(rep)),
        "free_parameters": int(gm._n_parameters()),
        "converged": bool(gm.converged_),
        "n_iter": int(gm.n_iter_),
        "fitted_weights": gm.weights_.tolist(),
        "fitted_means": gm.means_.tolist(),
    }


def main():
    rng = np.random.default_rng(20261203)
    cases = []
    # Three tilted, unequal colour-like families in 3-D (CIELAB-sized units), whole units.
    parts = []
    for mean, a, n in [
        ([50, 10, -20], [[4, 2, 0], [0, 1.5, 1], [0, 0, 1]], 900),
        ([70, -30, 30], [[2, 0, 0], [1, 5, 0], [0, 2, 2]], 600),
        ([30, 40, 10], [[1, 0, 0], [0, 1, 0], [0, 0, 1]], 300),
    ]:
        parts.append(rng.normal(size=(n, 3)) @ np.array(a, float).T + mean)
    cases.append(case("three_tilted_3d", np.round(np.vstack(parts)), 3, 0.25, 0))
    # The same data fitted with one component too many.
    cases.append(case("three_tilted_3d_k4", np.round(np.vstack(parts)), 4, 0.25, 1))
    # Four components in 2-D on half units, one of them a single repeated value (flat area:
    # only the floor keeps its covariance from collapsing).
    parts = [
        rng.normal(size=(500, 2)) @ np.array([[3, 1], [0, 1]]).T + [0, 0],
        rng.normal(size=(400, 2)) @ np.array([[1, 0], [2, 2]]).T + [15, 5],
        rng.normal(size=(300, 2)) * 2 + [5, 18],
        np.tile([[-12.5, 10.0]], (200, 1)),
    ]
    cases.append(case("four_2d_with_flat", np.round(np.vstack(parts) * 2) / 2, 4, 0.25, 2))
    # Five-band scene-like data (z-scored units), two overlapping classes; a small floor.
    parts = [rng.normal(size=(700, 5)) * 0.6, rng.normal(size=(500, 5)) * 0.4 + 1.2]
    cases.append(case("two_5d_overlapping", np.round(np.vstack(parts) * 4) / 4, 2, 1e-4, 3))

    a = rng.integers(0, 4, size=60)
    b = np.where(rng.random(60) < 0.7, a, rng.integers(0, 3, size=60))
    ari = [
        {"a": [0, 0, 1, 1, 2, 2], "b": [1, 1, 0, 0, 2, 2]},
        {"a": [0, 0, 1, 1], "b": [0, 1, 0, 1]},
        {"a": a.tolist(), "b": b.tolist()},
    ]
    for item in ari:
        item["ari"] = float(adjusted_rand_score(item["a"], item["b"]))

    doc = {
        "source": "tests/reference/gmm_reference.py: scikit-learn GaussianMixture(covariance_type='full') from a given start; sklearn.metrics.adjusted_rand_score",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scikit-learn": sklearn.__version__,
        },
        "cases": cases,
        "adjusted_rand_index": ari,
    }
    with open(OUT, "w") as f:
        json.dump(doc, f, separators=(",", ":"))
        f.write("\n")
    for c in cases:
        print(c["name"], c["k"], c["log_likelihood"], c["bic"], c["n_iter"], c["converged"], len(c["rows"]))


if __name__ == "__main__":
    main()
