#!/usr/bin/python3
"""Golden figures for placement/nmf, placement/rank and placement/cluster.

Run with Debian's interpreter, which has numpy, scipy 1.10 and scikit-learn 1.2:

    /usr/bin/python3 testdata/golden/nmf/gen_golden.py

It writes, beside itself:
  nndsvd.json    NNDSVD initialisations (Boutsidis & Gallopoulos 2008) as scikit-learn builds them
                 in sklearn.decomposition._nmf._initialize_nmf(init='nndsvd'), but from numpy's
                 exact SVD instead of randomized_svd; the script checks that sklearn's own output
                 agrees with it on each matrix and records the largest difference.
  sklearn_fit.json  the objective ||X - WH||_F^2 reached by sklearn NMF(init='nndsvd', solver='cd')
                 on a dense matrix (reconstruction_err_ is ||X - WH||_F, so it is squared here).
  linkage.json   scipy.cluster.hierarchy.linkage(method='average') and cophenet on given distances.
  ari.json       sklearn.metrics.adjusted_rand_score on pairs of labellings.
The matrices are random numbers from a seeded generator; nothing else goes in.
"""
import json
import os

import numpy as np
import scipy
import sklearn
from numpy.linalg import norm
from scipy.cluster.hierarchy import cophenet, linkage
from scipy.spatial.distance import squareform
from sklearn.decomposition import NMF
from sklearn.decomposition._nmf import _initialize_nmf
from sklearn.metrics import adjusted_rand_score

HERE = os.path.dirname(os.path.abspath(__file__))
EPS = 1e-6  # _initialize_nmf's default eps


def nndsvd_exact(X, k):
    """sklearn's NNDSVD construction, line for line, on numpy's exact SVD. Returns W, H and the
    smallest relative gap |m_p - m_n| / max(m_p, m_n) met, to show no pair choice is a near tie
    (a tie would make the result depend on the singular vectors' signs)."""
    U, S, Vt = np.linalg.svd(X, full_matrices=False)
    U, S, Vt = U[:, :k], S[:k], Vt[:k]
    W = np.zeros_like(U)
    H = np.zeros_like(Vt)
    W[:, 0] = np.sqrt(S[0]) * np.abs(U[:, 0])
    H[0, :] = np.sqrt(S[0]) * np.abs(Vt[0, :])
    gap = np.inf
    for j in range(1, k):
        x, y = U[:, j], Vt[j, :]
        x_p, y_p = np.maximum(x, 0), np.maximum(y, 0)
        x_n, y_n = np.abs(np.minimum(x, 0)), np.abs(np.minimum(y, 0))
        x_p_nrm, y_p_nrm = norm(x_p), norm(y_p)
        x_n_nrm, y_n_nrm = norm(x_n), norm(y_n)
        m_p, m_n = x_p_nrm * y_p_nrm, x_n_nrm * y_n_nrm
        gap = min(gap, abs(m_p - m_n) / max(m_p, m_n))
        if m_p > m_n:
            u, v, sigma = x_p / x_p_nrm, y_p / y_p_nrm, m_p
        else:
            u, v, sigma = x_n / x_n_nrm, y_n / y_n_nrm, m_n
        lbd = np.sqrt(S[j] * sigma)
        W[:, j] = lbd * u
        H[j, :] = lbd * v
    W[W < EPS] = 0
    H[H < EPS] = 0
    return W, H, gap


def dump(name, obj):
    with open(os.path.join(HERE, name), "w") as f:
        json.dump(obj, f, indent=1)
        f.write("\n")


def main():
    rng = np.random.default_rng(20261202)
    versions = {"numpy": np.__version__, "scipy": scipy.__version__, "sklearn": sklearn.__version__}

    # NNDSVD cases: a dense uniform matrix, a low-rank-plus-noise one, a wide one, and a sparse
    # 0/weight matrix shaped like a readings x witnesses table.
    cases = []
    shapes = [("uniform_8x6_k3", 8, 6, 3, "uniform"),
              ("lowrank_20x12_k4", 20, 12, 4, "lowrank"),
              ("wide_10x25_k5", 10, 25, 5, "uniform"),
              ("sparse_30x16_k4", 30, 16, 4, "sparse")]
    for name, m, n, k, kind in shapes:
        if kind == "uniform":
            X = rng.random((m, n))
        elif kind == "lowrank":
            X = rng.random((m, k)) @ rng.random((k, n)) + 0.01 * rng.random((m, n))
        else:
            X = np.where(rng.random((m, n)) < 0.3, rng.uniform(0.2, 2.0, (m, n)), 0.0)
        W, H, gap = nndsvd_exact(X, k)
        assert gap > 1e-6, (name, gap)
        Ws, Hs = _initialize_nmf(X, k, init="nndsvd", random_state=0)
        diff = max(np.abs(Ws - W).max(), np.abs(Hs - H).max())
        cases.append({"name": name, "k": k, "X": X.tolist(), "W": W.tolist(), "H": H.tolist(),
                      "min_pair_gap": gap, "sklearn_randomized_max_abs_diff": diff})
    dump("nndsvd.json", {"source": "NNDSVD as in sklearn.decomposition._nmf._initialize_nmf(init='nndsvd'),"
                         " computed from numpy.linalg.svd (exact) instead of randomized_svd; eps=1e-6",
                         "versions": versions, "cases": cases})

    # Fit: dense low rank plus noise, k = 4; tight tolerance so sklearn runs to its optimum.
    m, n, k = 60, 40, 4
    X = rng.random((m, k)) @ rng.random((k, n)) + 0.05 * rng.random((m, n))
    fits = []
    for tol, max_iter in [(1e-4, 200), (1e-8, 5000)]:
        model = NMF(n_components=k, init="nndsvd", solver="cd", tol=tol, max_iter=max_iter)
        model.fit_transform(X)
        fits.append({"tol": tol, "max_iter": max_iter, "n_iter": int(model.n_iter_),
                     "objective": float(model.reconstruction_err_ ** 2)})
    dump("sklearn_fit.json", {"source": "sklearn.decomposition.NMF(n_components=k, init='nndsvd', solver='cd',"
                              " beta_loss='frobenius'); objective = reconstruction_err_**2 = ||X - WH||_F^2",
                              "versions": versions, "k": k, "X": X.tolist(), "fits": fits})

    # Average linkage: random distances (no ties), and a consensus-like matrix 1 - C with many ties.
    link = []
    pts = rng.random((12, 3))
    D = np.sqrt(((pts[:, None, :] - pts[None, :, :]) ** 2).sum(-1))
    labs = rng.integers(0, 3, (10, 15))  # 10 runs of 3-group labels over 15 items
    labs[:, :5] = 0  # items 0-4 always together
    C = np.mean([(r[:, None] == r[None, :]).astype(float) for r in labs], axis=0)
    for name, Dm in [("euclidean_12", D), ("consensus_15", 1 - C)]:
        y = squareform(Dm, checks=False)
        Z = linkage(y, method="average")
        c, coph = cophenet(Z, y)
        link.append({"name": name, "D": Dm.tolist(), "Z": Z.tolist(), "cophenetic": squareform(coph).tolist(),
                     "cophenetic_correlation": float(c)})
    dump("linkage.json", {"source": "scipy.cluster.hierarchy.linkage(y, method='average'); cophenet(Z, y)",
                          "versions": versions, "cases": link})

    ari = []
    for a, b in [([0, 0, 1, 1, 2, 2], [0, 0, 1, 1, 2, 2]),
                 ([0, 0, 1, 1, 2, 2], [5, 5, 9, 9, 7, 7]),
                 ([0, 0, 0, 1, 1, 1], [0, 1, 0, 1, 0, 1]),
                 ([0, 0, 1, 2], [0, 0, 1, 1]),
                 ([0, 0, 0, 0], [0, 1, 2, 3]),
                 rng.integers(0, 4, (2, 40)).tolist(),
                 rng.integers(0, 6, (2, 100)).tolist()]:
        ari.append({"a": list(map(int, a)), "b": list(map(int, b)), "ari": float(adjusted_rand_score(a, b))})
    dump("ari.json", {"source": "sklearn.metrics.adjusted_rand_score(a, b)", "versions": versions, "cases": ari})


if __name__ == "__main__":
    main()
