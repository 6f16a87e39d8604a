"""An independent implementation, with numpy and scikit-learn, of the fills that
sextant's tests compare against (tests/imputation.rs).

Iterative PCA imputation after Josse & Husson (2012), "Handling missing values
in exploratory multivariate data analysis methods", Journal de la Societe
Francaise de Statistique 153(2):79-99: start from the column means (or
medians), then repeat the step F: centre and scale the completed table
(standard deviation with n - 1), take its singular value decomposition
Z = U diag(d) V', keep S terms, and replace the missing cells by the fit. The
fill is the fixed point of F; here it is reached by plain iteration (no
acceleration) until the change ||F(x) - x|| / ||F(x)|| of the filled cells is
below 1e-14, then 50 more steps, so the values are the fixed point to rounding.

The regularized variant follows the paper's section 2.2: the fitted values are
sum_s (sqrt(lambda_s) - sigma2 / sqrt(lambda_s)) u_is v_js, that is each kept
term is multiplied by 1 - sigma2 / lambda_s, with the noise variance per cell
sigma2 = ||X - X_S||^2 / (np - p - nS - pS + S^2 + S). The eigenvalues lambda_s
are taken with divisor n - 1, sextant's convention: lambda_s = d_s^2 / (n - 1).
The EM variant keeps the terms as they are.

Tables (rows i, features j, both from 0):
- "wine": Wine, cells with (7 i + 13 j) % 23 == 0 removed, S = 3 (also the
  top-level entries, read by the older tests);
- "iris50": the first 50 rows of iris (setosa), 4 features, cells with
  (5 i + 3 j) % 17 == 0 removed (12 cells), S = 2;
- "wdbc": breast cancer Wisconsin (diagnostic), 30 features, cells with
  (11 i + 7 j) % 29 == 0 removed, S = 5.
"plain_iterations" is how many plain steps reach a change below 1e-12.
Mean and median fills of Wine come from scikit-learn's SimpleImputer.

Run from the repository root:
    python3 tests/reference_impl/iterative_pca.py > tests/data/imputation_reference.json
"""
import csv
import json
import sys

import numpy as np
import sklearn
from sklearn.impute import SimpleImputer


def load(name, rows=None):
    """The numeric columns of tests/data/NAME.csv (all but the last, `class`)."""
    with open("tests/data/%s.csv" % name, newline="") as f:
        rows_read = list(csv.reader(f))
    header = rows_read[0][:-1]
    x = np.array([[float(v) for v in r[:-1]] for r in rows_read[1:]])
    return header, x if rows is None else x[:rows]


TABLES = {
    "wine": ("wine", None, lambda i, j: (7 * i + 13 * j) % 23 == 0, 3),
    "iris50": ("iris", 50, lambda i, j: (5 * i + 3 * j) % 17 == 0, 2),
    "wdbc": ("breast_cancer_wdbc", None, lambda i, j: (11 * i + 7 * j) % 29 == 0, 5),
}


def removed(n, p, rule):
    return np.array([[rule(i, j) for j in range(p)] for i in range(n)])


def fit(x, s, regularized):
    n, p = x.shape
    m = x.mean(axis=0)
    sd = x.std(axis=0, ddof=1)
    z = (x - m) / sd
    u, d, vt = np.linalg.svd(z, full_matrices=False)
    if regularized:
        sigma2 = (d[s:] ** 2).sum() / (n * p - p - n * s - p * s + s * s + s)
        lam = d[:s] ** 2 / (n - 1)
        shrink = np.maximum(1.0 - sigma2 / lam, 0.0)
    else:
        shrink = np.ones(s)
    return (u[:, :s] * (d[:s] * shrink)) @ vt[:s] * sd + m


def impute(x, gaps, s, regularized, start, max_iterations=100000):
    """The fixed point by plain iteration, and the plain steps to a change
    below 1e-12."""
    x = x.copy()
    x[gaps] = np.nan
    first = np.nanmean(x, axis=0) if start == "mean" else np.nanmedian(x, axis=0)
    x = np.where(gaps, first, x)
    to_1e12 = None
    extra = None
    for iteration in range(1, max_iterations + 1):
        new = fit(x, s, regularized)[gaps]
        change = np.linalg.norm(new - x[gaps]) / np.linalg.norm(new)
        x[gaps] = new
        if to_1e12 is None and change < 1e-12:
            to_1e12 = iteration
        if extra is None and change < 1e-14:
            extra = 50
        if extra is not None:
            extra -= 1
            if extra == 0:
                return x, to_1e12
    raise SystemExit("did not converge")


def main():
    out = {
        "_source": "tests/reference_impl/iterative_pca.py, numpy %s, scikit-learn %s" % (np.__version__, sklearn.__version__),
        "tables": {},
    }
    for key, (name, rows, rule, s) in TABLES.items():
        header, x = load(name, rows)
        n, p = x.shape
        gaps = removed(n, p, rule)
        cells = [(int(i), int(j)) for i, j in zip(*np.nonzero(gaps))]
        table = {"file": name, "rows": n, "features": header, "cells": cells, "components": s}
        for variant, regularized in (("regularized", True), ("em", False)):
            filled, plain = impute(x, gaps, s, regularized, "mean")
            table[variant] = {"plain_iterations": plain, "values": [repr(float(filled[c])) for c in cells]}
        out["tables"][key] = table
    wine = out["tables"]["wine"]
    out["features"] = wine["features"]
    out["cells"] = wine["cells"]
    out["regularized"] = wine["regularized"]
    out["em"] = wine["em"]
    header, x = load("wine")
    holed = np.where(removed(*x.shape, TABLES["wine"][2]), np.nan, x)
    for strategy in ("mean", "median"):
        filled = SimpleImputer(strategy=strategy).fit_transform(holed)
        out["simple_" + strategy] = [repr(float(filled[c])) for c in wine["cells"]]
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
