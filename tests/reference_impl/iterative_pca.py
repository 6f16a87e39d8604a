"""An independent implementation, with numpy and scikit-learn, of the fills that
sextant's tests compare against (tests/imputation.rs).

Iterative PCA imputation after Josse & Husson (2012), "Handling missing values
in exploratory multivariate data analysis methods", Journal de la Societe
Francaise de Statistique 153(2):79-99: start from the column means (or
medians), then repeat: centre and scale the completed table (standard deviation
with n - 1), take its singular value decomposition Z = U diag(d) V', keep S
terms, and replace the missing cells by the fit, until the relative change of
the filled cells falls below the tolerance. The regularized variant shrinks
each kept singular value d_s to d_s (1 - n sigma2 / d_s^2), with
sigma2 = sum_{s>S} d_s^2 / (np - p - nS - pS + S^2 + S); the EM variant keeps
them as they are.

The removed cells of the Wine table are those with (7 i + 13 j) % 23 == 0
(row i, feature j, both from 0). Mean and median fills come from
scikit-learn's SimpleImputer.

Run from the repository root:
    python3 tests/reference_impl/iterative_pca.py > tests/data/imputation_reference.json
"""
import csv
import json
import sys

import numpy as np
import sklearn
from sklearn.impute import SimpleImputer


def load_wine():
    with open("tests/data/wine.csv", newline="") as f:
        rows = list(csv.reader(f))
    header = rows[0][:-1]
    x = np.array([[float(v) for v in r[:-1]] for r in rows[1:]])
    return header, x


def removed(n, p):
    return np.array([[(7 * i + 13 * j) % 23 == 0 for j in range(p)] for i in range(n)])


def fit(x, s, regularized):
    n, p = x.shape
    m = x.mean(axis=0)
    sd = x.std(axis=0, ddof=1)
    z = (x - m) / sd
    u, d, vt = np.linalg.svd(z, full_matrices=False)
    if regularized:
        sigma2 = (d[s:] ** 2).sum() / (n * p - p - n * s - p * s + s * s + s)
        shrink = np.maximum(1.0 - n * sigma2 / d[:s] ** 2, 0.0)
    else:
        shrink = np.ones(s)
    return (u[:, :s] * (d[:s] * shrink)) @ vt[:s] * sd + m


def impute(x, gaps, s, regularized, start, tolerance=1e-24, max_iterations=100000):
    x = x.copy()
    x[gaps] = np.nan
    first = np.nanmean(x, axis=0) if start == "mean" else np.nanmedian(x, axis=0)
    x = np.where(gaps, first, x)
    for iteration in range(1, max_iterations + 1):
        new = fit(x, s, regularized)
        old = x[gaps]
        change = ((new[gaps] - old) ** 2).sum() / (old ** 2).sum()
        x[gaps] = new[gaps]
        if change < tolerance:
            return x, iteration
    raise SystemExit("did not converge")


def main():
    header, x = load_wine()
    n, p = x.shape
    gaps = removed(n, p)
    cells = [(int(i), int(j)) for i, j in zip(*np.nonzero(gaps))]
    out = {
        "_source": "tests/reference_impl/iterative_pca.py, numpy %s, scikit-learn %s" % (np.__version__, sklearn.__version__),
        "features": header,
        "cells": cells,
    }
    for name, regularized in (("regularized", True), ("em", False)):
        filled, iterations = impute(x, gaps, 3, regularized, "mean")
        out[name] = {"components": 3, "iterations": iterations, "values": [repr(float(filled[c])) for c in cells]}
    holed = np.where(gaps, np.nan, x)
    for strategy in ("mean", "median"):
        filled = SimpleImputer(strategy=strategy).fit_transform(holed)
        out["simple_" + strategy] = [repr(float(filled[c])) for c in cells]
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
