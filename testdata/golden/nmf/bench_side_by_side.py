#!/usr/bin/python3
"""Data and the scikit-learn side of bench_side_by_side.sh.

    bench_side_by_side.py DIR   writes DIR/X.bin and DIR/M.bin (3000 x 600 little-endian float64,
                                row-major) and times sklearn NMF on X.

The matrix is an invented tradition shaped like prepared collation data: 1,000 variation units of
3 readings (3,000 reading rows) x 600 witnesses in 12 groups whose exemplars depart from a common
ancestor at 30% of the units, copyists erring at 8%, 10% of witness-unit cells lost (all rows of
the unit unobserved), cells weighted by IDF log(N/n). scikit-learn has no mask: it factorises X
with lacunae as zeros, NMF(n_components=12, init='nndsvd', solver='cd') with its defaults
(tol=1e-4, max_iter=200); the best of 5 timed fits is printed.
"""
import os
import sys
import time

import numpy as np
from sklearn.decomposition import NMF


def simulate(nw=600, nu=1000, nr=3, g=12, seed=1, mut=0.3, err=0.08, lac=0.10):
    rng = np.random.default_rng(seed)
    anc = rng.integers(0, nr, nu)
    arch = np.where(rng.random((g, nu)) < mut, rng.integers(0, nr, (g, nu)), anc)
    R = arch[np.arange(nw) % g]
    R = np.where(rng.random((nw, nu)) < err, rng.integers(0, nr, (nw, nu)), R)
    obs = rng.random((nw, nu)) >= lac
    X = np.zeros((nu * nr, nw))
    M = np.zeros((nu * nr, nw))
    for u in range(nu):
        N = obs[:, u].sum()
        for r in range(nr):
            has = (R[:, u] == r) & obs[:, u]
            if has.any():
                X[u * nr + r, has] = np.log(N / has.sum())
            M[u * nr + r, obs[:, u]] = 1
    return X, M


def main():
    out = sys.argv[1]
    X, M = simulate()
    X.astype("<f8").tofile(os.path.join(out, "X.bin"))
    M.astype("<f8").tofile(os.path.join(out, "M.bin"))
    best = None
    for _ in range(5):
        t = time.perf_counter()
        model = NMF(n_components=12, init="nndsvd", solver="cd")
        model.fit_transform(X)
        dt = time.perf_counter() - t
        best = dt if best is None else min(best, dt)
    try:
        from threadpoolctl import threadpool_info
        blas = ", ".join(f"{i['internal_api']} {i['num_threads']} threads" for i in threadpool_info())
    except ImportError:
        blas = "unknown BLAS"
    print(f"sklearn_seconds {best:.4f}")
    print(f"sklearn: NMF(12, nndsvd, cd) unmasked, {model.n_iter_} iterations, "
          f"objective ||X-WH||^2 = {model.reconstruction_err_**2:.6g} ({blas})")


if __name__ == "__main__":
    main()
