#!/usr/bin/python3
"""Reference values for strayleaf's calibration arithmetic (placement/calibrate, placement/model).

Run with Debian's interpreter, which has python3-scipy 1.10 and python3-sklearn 1.2:

    /usr/bin/python3 testdata/golden/calibrate/gen_calibrate.py > testdata/golden/calibrate/calibrate_golden.json

Sections of the output:
  isotonic     sklearn.isotonic.IsotonicRegression(increasing=True, out_of_bounds="clip") fitted
               on weighted samples (ties in x included); the thresholds it keeps
               (X_thresholds_, y_thresholds_) and its predictions at query points.
  logistic     sklearn.linear_model.LogisticRegression(C, solver="newton-cg") with an unpenalised
               intercept: the L2-penalised maximum-likelihood coefficients.
  ece          expected calibration error over 10 equal-width bins, from
               sklearn.calibration.calibration_curve(strategy="uniform") and the bin counts of the
               same binning (np.searchsorted on the inner edges, as calibration_curve does).
  mutual_info  sklearn.metrics.mutual_info_score on a contingency table (natural log).
  chi2         scipy.stats.chi2.ppf for the boundary likelihood-ratio test.

All data are random numbers from a seeded generator; nothing here is taken from a collation.
"""
import json
import sys

import numpy as np
from scipy.stats import chi2
from sklearn.calibration import calibration_curve
from sklearn.isotonic import IsotonicRegression
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import mutual_info_score

rng = np.random.default_rng(20261203)
out = {}

# Isotonic regression.
iso = []
for n, ties in [(12, False), (40, True), (200, True)]:
    x = rng.uniform(-3, 3, n)
    if ties:
        x = np.round(x, 1)
    y = (rng.uniform(0, 1, n) < 1 / (1 + np.exp(-1.5 * x))).astype(float)
    w = rng.uniform(0.5, 2.0, n)
    f = IsotonicRegression(increasing=True, out_of_bounds="clip").fit(x, y, sample_weight=w)
    q = np.concatenate([[-4.0, 4.0], rng.uniform(-3.2, 3.2, 25), x[:5]])
    iso.append({
        "x": x.tolist(), "y": y.tolist(), "w": w.tolist(),
        "thresholds": f.X_thresholds_.tolist(), "values": f.y_thresholds_.tolist(),
        "query": q.tolist(), "predict": f.predict(q).tolist(),
    })
out["isotonic"] = iso

# Penalised logistic regression.
logi = []
for n, d, C in [(80, 2, 1.0), (300, 4, 10.0), (500, 5, 0.5)]:
    X = rng.standard_normal((n, d))
    beta = rng.standard_normal(d)
    p = 1 / (1 + np.exp(-(X @ beta + 0.3)))
    y = (rng.uniform(0, 1, n) < p).astype(int)
    m = LogisticRegression(C=C, solver="newton-cg", tol=1e-10, max_iter=1000).fit(X, y)
    logi.append({"X": X.tolist(), "y": y.tolist(), "C": C,
                 "intercept": float(m.intercept_[0]), "coef": m.coef_[0].tolist()})
out["logistic"] = logi

# Expected calibration error, 10 equal-width bins.
ece = []
for n in [50, 1000]:
    prob = rng.uniform(0, 1, n)
    prob[:3] = [0.0, 0.1, 1.0]  # bin edges
    y = (rng.uniform(0, 1, n) < prob ** 1.3).astype(int)
    frac_pos, mean_pred = calibration_curve(y, prob, n_bins=10, strategy="uniform")
    bins = np.linspace(0.0, 1.0, 11)
    ids = np.searchsorted(bins[1:-1], prob)
    counts = np.bincount(ids, minlength=10)
    counts = counts[counts > 0]
    e = float(np.sum(counts / n * np.abs(frac_pos - mean_pred)))
    ece.append({"prob": prob.tolist(), "y": y.tolist(), "ece": e})
out["ece"] = ece

# Mutual information of a contingency table (groups x readings).
mi = []
for g, r in [(2, 2), (3, 4), (5, 3)]:
    C = rng.integers(0, 20, size=(g, r)).astype(float)
    C[0, 0] += 1
    mi.append({"table": C.tolist(), "mi": float(mutual_info_score(None, None, contingency=C))})
out["mutual_info"] = mi

out["chi2"] = {"ppf_0.90_df1": float(chi2.ppf(0.90, 1)), "ppf_0.95_df1": float(chi2.ppf(0.95, 1)),
               "ppf_0.99_df1": float(chi2.ppf(0.99, 1))}

json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
