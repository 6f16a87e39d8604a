"""Expected SPE-limit quantities for tests/randomized.rs, on tables built by
hand from chosen orthogonal factors and singular values, so that every
eigenvalue is known exactly.

The table: n = 64 rows, p = 16 features, Z = sum_k c_k u_k v_k' with u_k column
k + 1 of the 64 x 64 Sylvester-Hadamard matrix (entries +-1, each column after
the first sums to 0, so Z is centred) and v_k column k of the 16 x 16 one. Then
Z'Z = sum_k 64 * 16 * c_k^2 v_k v_k' / 16, whose eigenvalues with divisor
n - 1 are lambda_k = 1024 c_k^2 / 63. The c_k are dyadic numbers, so every
entry of Z is exact in binary and in the shortest decimal text.

Five signal components c = 64, 32, 16, 8, 4 are kept; the eleven others are
tail * (16 + m) / 16 for m = 0..10, with tail = 2^-10 ("tiny": the unexplained
share is about 3e-10) or 2^-3 ("small", about 2e-5).

For each: theta1 = sum of the tail eigenvalues, theta2 = sum of their squares,
and Box's (1954) limit g chi2_h(c) with g = theta2/theta1, h = theta1^2/theta2
(scipy's chi2.ppf), at confidence 0.95 and 0.99. A numpy SVD of the same table
confirms the eigenvalues (printed to stderr).

Run from the repository root:
    python3 tests/reference_impl/spe_tail.py > tests/data/spe_tail_reference.json
"""
import json
import sys

import numpy as np
import scipy
from scipy.stats import chi2


def hadamard(order):
    h = np.array([[1.0]])
    while h.shape[0] < order:
        h = np.block([[h, h], [h, -h]])
    return h


def components(tail):
    signal = [64.0, 32.0, 16.0, 8.0, 4.0]
    return signal + [tail * (16 + m) / 16 for m in range(11)]


def table(c):
    u = hadamard(64)[:, 1:17]
    v = hadamard(16)
    return sum(ck * np.outer(u[:, k], v[:, k]) for k, ck in enumerate(c))


def main():
    out = {"_source": "tests/reference_impl/spe_tail.py, numpy %s, scipy %s" % (np.__version__, scipy.__version__), "tables": {}}
    for name, tail in (("tiny", 2.0 ** -10), ("small", 2.0 ** -3)):
        c = components(tail)
        lam = [1024 * ck * ck / 63 for ck in c]
        rest = lam[5:]
        theta1 = sum(rest)
        theta2 = sum(l * l for l in rest)
        g, h = theta2 / theta1, theta1 * theta1 / theta2
        z = table(c)
        svd = np.linalg.svd(z, compute_uv=False) ** 2 / 63
        print(name, "largest relative gap between SVD and hand eigenvalues:",
              max(abs(a - b) / b for a, b in zip(svd, sorted(lam, reverse=True))), file=sys.stderr)
        out["tables"][name] = {
            "tail": tail,
            "eigenvalues": [repr(l) for l in lam],
            "theta1": repr(theta1),
            "theta2": repr(theta2),
            "box": {repr(conf): repr(float(g * chi2.ppf(conf, h))) for conf in (0.95, 0.99)},
        }
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
