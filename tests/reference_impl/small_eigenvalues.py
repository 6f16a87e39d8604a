"""The table of tests/precision.rs for the smallest eigenvalues, and numpy's
singular value decomposition of it, as an independent reference.

The table: n = 200 rows, p = 12 features, X = U diag(s) V' + offsets, with U
(n x p) orthonormal columns orthogonal to the ones vector (so X's columns have
the chosen centred part), V (p x p) orthogonal, both from numpy's QR of seeded
normal matrices, and singular values s = 10 sqrt(n - 1) * 10^(-5 t/(p - 1)),
t = 0..p-1: the covariance eigenvalues s^2/(n - 1) run from 100 down to
1e-8, ten orders of magnitude. Values are written with repr(), which reads
back to the same double.

The reference: numpy.linalg.svd of the table as read back, centred on numpy's
column means; eigenvalues d^2 / (n - 1); and the SPE limits at 95 % for nine
kept components (the discarded eigenvalues are 7e-7 to 1e-8: a
low-noise table) from the discarded eigenvalues, Jackson & Mudholkar (1979)
(theta_i = sum of lambda^i, h0 = 1 - 2 theta1 theta3 / (3 theta2^2), with
scipy's normal quantile) and Box (1954) (g chi2_h, g = theta2/theta1,
h = theta1^2/theta2, with scipy's chi-squared quantile).

Run from the repository root; --write-table (re)makes the table first, which
was done once (the bits of the table depend on numpy's generator and QR):
    python3 tests/reference_impl/small_eigenvalues.py tests/data/small_eigenvalues.csv \
        [--write-table] > tests/data/small_eigenvalues_reference.json
(.ci/run reruns it without --write-table and compares the output with
tests/reference_impl/same_numbers.py.)
"""
import csv
import json
import sys

import numpy as np
import scipy
from scipy import stats

N, P, KEEP, CONFIDENCE = 200, 12, 9, 0.95


def make_table(path):
    rng = np.random.default_rng(20261205)
    a = rng.standard_normal((N, P))
    a -= a.mean(axis=0)
    u, _ = np.linalg.qr(a)
    v, _ = np.linalg.qr(rng.standard_normal((P, P)))
    s = 10.0 * np.sqrt(N - 1) * 10.0 ** (-5.0 * np.arange(P) / (P - 1))
    x = (u * s) @ v.T + 1.5 * np.arange(1, P + 1)
    with open(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["id"] + ["f%02d" % (j + 1) for j in range(P)])
        for i in range(N):
            w.writerow(["r%03d" % (i + 1)] + [repr(float(v)) for v in x[i]])


def read_table(path):
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    return np.array([[float(v) for v in r[1:]] for r in rows[1:]])


def main():
    path = sys.argv[1]
    if len(sys.argv) > 2 and sys.argv[2] == "--write-table":
        make_table(path)
    x = read_table(path)
    n = x.shape[0]
    d = np.linalg.svd(x - x.mean(axis=0), compute_uv=False)
    eigenvalues = d ** 2 / (n - 1)
    rest = eigenvalues[KEEP:]
    t1, t2, t3 = (rest ** 1).sum(), (rest ** 2).sum(), (rest ** 3).sum()
    h0 = 1.0 - 2.0 * t1 * t3 / (3.0 * t2 ** 2)
    z = stats.norm.ppf(CONFIDENCE)
    jm = t1 * (z * np.sqrt(2.0 * t2 * h0 ** 2) / t1 + 1.0 + t2 * h0 * (h0 - 1.0) / t1 ** 2) ** (1.0 / h0)
    g, h = t2 / t1, t1 ** 2 / t2
    box = g * stats.chi2.ppf(CONFIDENCE, h)
    out = {
        "_source": "tests/reference_impl/small_eigenvalues.py, numpy %s, scipy %s"
        % (np.__version__, scipy.__version__),
        "eigenvalues": [float(v) for v in eigenvalues],
        "keep": KEEP,
        "confidence": CONFIDENCE,
        "spe_limit_jackson_mudholkar": float(jm),
        "spe_limit_box": float(box),
    }
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
