#!/usr/bin/env python3
"""The same analysis as the benchmark recipe, done by hand in Python.

This is the script an analyst would otherwise write for one PCA run, and the
benchmark's point of comparison for sextant:

  1. read the CSV with pandas;
  2. fill each missing cell with its feature's mean (scikit-learn's imputer);
  3. centre each feature and divide by its standard deviation with divisor
     n - 1 (sextant's convention; scikit-learn's scaler divides by n);
  4. PCA with ``--k`` components (scikit-learn, ``--solver``);
  5. write scores.csv (id, group, PC1..PCk), loadings.csv and variance.csv;
  6. draw a scree plot and a PC1/PC2 scatter of every row coloured by group
     (matplotlib, headless), in each format of ``--formats``;
  7. write manifest.json with the SHA-256 of the input and of every output.

With ``--timings FILE`` it appends one JSON line with the seconds spent in
each step and the process's peak resident memory after it.

    python benches/reference_pipeline.py target/bench-data/M.csv \\
        --out target/bench-data/out/M-reference --k 10
"""
import time

STARTED = time.perf_counter()

import argparse  # noqa: E402
import hashlib  # noqa: E402
import json  # noqa: E402
import os  # noqa: E402
import resource  # noqa: E402
import sys  # noqa: E402

import matplotlib  # noqa: E402

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import sklearn  # noqa: E402
from sklearn.decomposition import PCA  # noqa: E402
from sklearn.impute import SimpleImputer  # noqa: E402


class Steps:
    """Seconds and peak memory (MiB) at the end of each step."""

    def __init__(self):
        self.seconds = {}
        self.peak_mib = {}
        self._last = STARTED
        self.done("import")

    def done(self, step):
        now = time.perf_counter()
        self.seconds[step] = round(now - self._last, 4)
        self.peak_mib[step] = round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0, 1)
        self._last = now


def sha256_of(path):
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for piece in iter(lambda: f.read(1 << 22), b""):
            digest.update(piece)
    return digest.hexdigest()


def scree_figure(ratio):
    n = len(ratio)
    at = np.arange(1, n + 1)
    fig, ax = plt.subplots(figsize=(6, 4))
    ax.bar(at, ratio, color="tab:blue", label="share of variance")
    ax.plot(at, np.cumsum(ratio), marker="o", color="black", label="cumulative share")
    ax.set_xticks(at)
    ax.set_xlabel("principal component")
    ax.set_ylabel("share of total variance")
    ax.set_ylim(0, 1.05)
    ax.legend(loc="center right")
    fig.tight_layout()
    return fig


def scores_figure(scores, groups, share):
    fig, ax = plt.subplots(figsize=(6, 6))
    for g in sorted(set(groups)):
        rows = groups == g
        ax.scatter(scores[rows, 0], scores[rows, 1], s=3, alpha=0.5, label=str(g))
    ax.set_xlabel(f"PC1 ({share[0]:.1%})")
    ax.set_ylabel(f"PC2 ({share[1]:.1%})")
    ax.legend(title="group", markerscale=4)
    fig.tight_layout()
    return fig


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("table", help="input CSV")
    ap.add_argument("--out", required=True, help="results folder (created)")
    ap.add_argument("--k", type=int, default=10, help="components to keep")
    ap.add_argument("--id", default="sample_id", help="id column")
    ap.add_argument("--group", default="group", help="group column")
    ap.add_argument("--solver", default="full",
                    help="scikit-learn svd_solver: full (default), auto, covariance_eigh, randomized, arpack")
    ap.add_argument("--formats", default="png,svg", help="figure formats, comma-separated")
    ap.add_argument("--timings", help="append one JSON line of step timings to this file")
    a = ap.parse_args(argv)
    os.makedirs(a.out, exist_ok=True)
    steps = Steps()

    # 1. read
    frame = pd.read_csv(a.table)
    ids = frame[a.id].to_numpy()
    groups = frame[a.group].astype(str).to_numpy()
    numeric = frame.drop(columns=[a.id, a.group]).select_dtypes("number")
    features = list(numeric.columns)
    del frame
    steps.done("read")

    # 2. mean imputation
    X = SimpleImputer(strategy="mean").fit_transform(numeric)
    del numeric
    steps.done("impute")

    # 3. unit variance with the n - 1 divisor
    X -= X.mean(axis=0)
    X /= X.std(axis=0, ddof=1)
    steps.done("scale")

    # 4. PCA
    pca = PCA(n_components=a.k, svd_solver=a.solver, random_state=0)
    scores = pca.fit_transform(X)
    steps.done("pca")

    # 5. tables
    names = [f"PC{i}" for i in range(1, a.k + 1)]
    outputs = []
    table = pd.DataFrame(scores, columns=names)
    table.insert(0, a.group, groups)
    table.insert(0, a.id, ids)
    outputs.append(os.path.join(a.out, "scores.csv"))
    table.to_csv(outputs[-1], index=False)
    del table
    outputs.append(os.path.join(a.out, "loadings.csv"))
    pd.DataFrame(pca.components_.T, index=pd.Index(features, name="feature"), columns=names).to_csv(outputs[-1])
    outputs.append(os.path.join(a.out, "variance.csv"))
    pd.DataFrame({
        "component": names,
        "eigenvalue": pca.explained_variance_,
        "share": pca.explained_variance_ratio_,
        "cumulative": np.cumsum(pca.explained_variance_ratio_),
    }).to_csv(outputs[-1], index=False)
    steps.done("write")

    # 6. figures
    formats = [f.strip() for f in a.formats.split(",") if f.strip()]
    for stem, fig in (("scree", scree_figure(pca.explained_variance_ratio_)),
                      ("scores-pc1-pc2", scores_figure(scores, groups, pca.explained_variance_ratio_))):
        for fmt in formats:
            outputs.append(os.path.join(a.out, f"{stem}.{fmt}"))
            fig.savefig(outputs[-1], dpi=100)
        plt.close(fig)
    steps.done("plot")

    # 7. hashes
    manifest = {
        "input": {"file": os.path.basename(a.table), "bytes": os.path.getsize(a.table), "sha256": sha256_of(a.table)},
        "outputs": {os.path.basename(p): {"bytes": os.path.getsize(p), "sha256": sha256_of(p)} for p in outputs},
        "settings": {"k": a.k, "solver": a.solver, "imputation": "mean", "scaling": "unit variance (n - 1)"},
        "versions": {"python": sys.version.split()[0], "numpy": np.__version__, "pandas": pd.__version__,
                     "scikit-learn": sklearn.__version__, "matplotlib": matplotlib.__version__},
    }
    with open(os.path.join(a.out, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1, sort_keys=True)
        f.write("\n")
    steps.done("hash")

    record = {
        "table": os.path.basename(a.table),
        "shape": list(X.shape),
        "k": a.k,
        "solver": a.solver,
        "solver_used": getattr(pca, "_fit_svd_solver", a.solver),
        "seconds": steps.seconds,
        "seconds_total": round(time.perf_counter() - STARTED, 4),
        "peak_mib_after": steps.peak_mib,
        "variance_share": [round(float(v), 6) for v in pca.explained_variance_ratio_],
        "versions": manifest["versions"],
    }
    if a.timings:
        with open(a.timings, "a") as f:
            f.write(json.dumps(record) + "\n")
    else:
        print(json.dumps(record))
    return 0


if __name__ == "__main__":
    sys.exit(main())
