#!/usr/bin/python3
"""Reference solutions for strayleaf's NNLS solver (placement/nnls).

Run with Debian's interpreter, which has python3-scipy 1.10:

    /usr/bin/python3 testdata/golden/nnls/gen_nnls.py > testdata/golden/nnls/nnls_golden.json

Each problem min ||A x - b||^2, x >= 0, is solved by scipy.optimize.nnls (scipy's wrapper of the
Lawson-Hanson active-set code). For a rank-deficient A the minimiser may not be unique, so for
each component x_i we also compute the range of x_i over the whole solution set
{x >= 0 : A x = A x*} with two linear programmes (scipy.optimize.linprog, HiGHS); "fixed" marks
the components whose range is (numerically) a single point. The Go test compares x only on
fixed components, and always compares the residual norm and the fitted values A x*.

All data are random numbers from a seeded generator; nothing here is taken from a collation.
"""
import json
import sys

import numpy as np
import scipy
from scipy.optimize import linprog, nnls

rng = np.random.default_rng(20261202)


def dense(m, k):
    return rng.standard_normal((m, k))


def nonneg(m, k):
    return rng.uniform(0.0, 1.0, (m, k))


def mixture_rhs(A, active, noise):
    m, k = A.shape
    x0 = np.zeros(k)
    idx = rng.choice(k, size=min(active, k), replace=False)
    x0[idx] = rng.uniform(0.2, 1.0, idx.size)
    return A @ x0 + noise * rng.standard_normal(m)


problems = []


def add(name, A, b):
    problems.append((name, np.asarray(A, dtype=float), np.asarray(b, dtype=float)))


# Small and medium full-rank problems, both sign patterns.
a = dense(6, 1)
add("k1_positive", a, a[:, 0] * 0.7 + 0.1 * rng.standard_normal(6))
a = dense(6, 1)
add("k1_negative_correlation", a, -a[:, 0] + 0.1 * rng.standard_normal(6))
add("k2_dense", dense(10, 2), rng.standard_normal(10))
add("k3_dense", dense(8, 3), rng.standard_normal(8))
add("k5_dense", dense(15, 5), rng.standard_normal(15))
add("k8_dense", dense(20, 8), rng.standard_normal(20))
a = nonneg(36, 12)
add("k12_nonneg_mixture", a, mixture_rhs(a, 3, 0.05))
add("k12_dense", dense(40, 12), rng.standard_normal(40))
add("k20_dense", dense(60, 20), rng.standard_normal(60))
a = nonneg(90, 30)
add("k30_nonneg_mixture", a, mixture_rhs(a, 6, 0.1))
add("k30_dense_near_square", dense(35, 30), rng.standard_normal(35))
add("k40_dense", dense(100, 40), rng.standard_normal(100))
add("k50_dense", dense(120, 50), rng.standard_normal(120))
a = nonneg(150, 50)
add("k50_nonneg_mixture", a, mixture_rhs(a, 8, 0.1))
a = dense(30, 10) * 10.0 ** rng.uniform(-3, 3, 10)
add("k10_scaled_columns", a, rng.standard_normal(30))
a = nonneg(24, 12)
add("k12_nonneg_negative_b", a, -rng.uniform(0.1, 1.0, 24))

# More unknowns than rows (rank-deficient by shape).
add("k12_wide_nonneg", nonneg(5, 12), rng.standard_normal(5))
add("k50_wide_nonneg", nonneg(30, 50), rng.standard_normal(30))
add("k20_wide_dense", dense(8, 20), rng.standard_normal(8))

# Rank-deficient by construction.
add("k10_rank4_nonneg", nonneg(30, 4) @ nonneg(4, 10), rng.standard_normal(30))
add("k12_rank5_dense", dense(30, 5) @ dense(5, 12), rng.standard_normal(30))
a = nonneg(20, 8)
a[:, 5] = a[:, 2]
add("k8_duplicate_column", a, rng.standard_normal(20))
a = nonneg(20, 8)
a[:, 6] = a[:, 1]
add("k8_duplicate_column_in_support", a, mixture_rhs(a, 8, 0.05))
a = nonneg(15, 6)
a[:, 3] = 0.0
add("k6_zero_column", a, rng.standard_normal(15))
add("k1_zero_column", np.zeros((4, 1)), rng.standard_normal(4))
a = nonneg(30, 4) @ nonneg(4, 10)
x0 = np.zeros(10)
x0[[1, 4, 7]] = [0.5, 1.0, 0.3]
add("k10_rank4_b_in_cone", a, a @ x0)

# Special right-hand sides.
add("k4_b_zero", dense(10, 4), np.zeros(10))
a = nonneg(25, 10)
x0 = np.zeros(10)
x0[[0, 3, 8]] = [0.4, 1.2, 0.7]
add("k10_b_in_cone", a, a @ x0)
a = dense(20, 6)
add("k6_b_in_span", a, a @ rng.standard_normal(6))


def component_ranges(A, y, x):
    """For each i, whether x_i is fixed over {x >= 0 : A x = y}."""
    m, k = A.shape
    scale = max(1.0, float(np.max(np.abs(x))))
    fixed = []
    for i in range(k):
        e = np.zeros(k)
        e[i] = 1.0
        lo = linprog(e, A_eq=A, b_eq=y, bounds=[(0, None)] * k, method="highs")
        hi = linprog(-e, A_eq=A, b_eq=y, bounds=[(0, None)] * k, method="highs")
        if lo.status != 0 or hi.status != 0:
            if hi.status == 3:  # unbounded above: x_i is free
                fixed.append(False)
                continue
            raise RuntimeError("linprog failed on component %d: %s / %s" % (i, lo.message, hi.message))
        fixed.append(bool(-hi.fun - lo.fun <= 1e-7 * scale))
    return fixed


out = []
for name, A, b in problems:
    m, k = A.shape
    x, rnorm = nnls(A, b)
    ax = A @ x
    fixed = component_ranges(A, ax, x)
    out.append({
        "name": name,
        "m": m,
        "k": k,
        "a": [float(v) for v in A.reshape(-1)],  # row-major
        "b": [float(v) for v in b],
        "x": [float(v) for v in x],
        "rnorm": float(rnorm),
        "ax": [float(v) for v in ax],
        "fixed": fixed,
        "unique": all(fixed),
    })
    print("%-32s m=%3d k=%2d rnorm=%.6g unique=%s" % (name, m, k, rnorm, all(fixed)), file=sys.stderr)

json.dump({
    "source": "scipy.optimize.nnls (scipy %s, numpy %s; Debian python3-scipy), uniqueness by "
              "scipy.optimize.linprog (HiGHS); generated by testdata/golden/nnls/gen_nnls.py"
              % (scipy.__version__, np.__version__),
    "problems": out,
}, sys.stdout, indent=None)
sys.stdout.write("\n")
