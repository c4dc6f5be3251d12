#!/usr/bin/python3
"""Reference values for the cluster-robust sandwich covariance behind strayleaf's separation
feature (placement/model, Model.separation).

Run with Debian's interpreter, which has python3-statsmodels 0.13 (and numpy):

    /usr/bin/python3 testdata/golden/sandwich/gen_sandwich.py > testdata/golden/sandwich/sandwich_golden.json

Each problem is a least-squares fit y ~ X (no intercept) whose rows fall into clusters, as the
rows of a witness fall into variation units. statsmodels' OLS(y, X).fit(cov_type="cluster",
cov_kwds={"groups": g, "use_correction": False}) gives the coefficients and the sandwich
covariance (X^T X)^{-1} (sum_g X_g^T e_g e_g^T X_g) (X^T X)^{-1} without a small-sample factor.

All data are random numbers from a seeded generator; nothing here is taken from a collation.
"""
import json
import sys

import numpy as np
import statsmodels
import statsmodels.api as sm


def problem(rng, clusters, rows_per, q):
    n = clusters * rows_per
    x = rng.random((n, q)) * (rng.random((n, q)) < 0.7)
    x[:, 0] += 0.1  # no all-zero column
    y = x @ rng.random(q) + 0.3 * rng.standard_normal(n)
    groups = np.repeat(np.arange(clusters), rows_per)
    fit = sm.OLS(y, x).fit(cov_type="cluster", cov_kwds={"groups": groups, "use_correction": False})
    return {
        "x": x.tolist(), "y": y.tolist(), "groups": groups.tolist(),
        "params": fit.params.tolist(), "cov": fit.cov_params().tolist(),
    }


def main():
    rng = np.random.default_rng(20261202)
    cases = [problem(rng, c, r, q) for c, r, q in [(12, 3, 2), (30, 4, 3), (8, 5, 4), (50, 2, 5), (6, 6, 1)]]
    json.dump({"statsmodels": statsmodels.__version__, "numpy": np.__version__, "cases": cases}, sys.stdout, indent=1)
    sys.stdout.write("\n")


main()
