#!/usr/bin/env python3
"""Write the benchmark's synthetic CSV tables, deterministically.

Every table has a header row, a text id column (``sample_id``), a category
column (``group``, four levels of unequal size) and ``p`` numeric feature
columns ``x0001``, ``x0002``, ... The features are built from five latent
factors whose means depend on the group, mixed into the columns by a random
loading matrix, plus Student-t noise; each column then gets its own unit
(a scale between 0.01 and 10,000), an offset, and is rounded to about six
significant digits, the way an instrument export looks. A fixed share of the
numeric cells is left empty (missing).

The same seed always gives the same bytes for the same numpy version: the
column parameters come from one generator, and each block of rows from its
own generator seeded with (seed, table, block number), so the number of
worker processes does not change the output.

    python benches/make_tables.py --out target/bench-data S M
    python benches/make_tables.py --out target/bench-data --force L

A small JSON file beside each table (``<name>.csv.json``) records the table's
specification, byte size and SHA-256. A table whose JSON matches the current
specification and whose bytes still hash to the recorded value is kept as it
is; anything else is written again.
"""
import argparse
import hashlib
import json
import multiprocessing
import os
import sys

import numpy as np

# name: (data rows, numeric feature columns, share of missing numeric cells)
TABLES = {
    "S": (10_000, 20, 0.0),
    "M": (200_000, 50, 0.01),
    "L": (1_000_000, 100, 0.01),
    "W": (500, 5_000, 0.0),
    "P": (5_000, 1_000, 0.0),
}
SEED = 7_301_955
GENERATOR_VERSION = 1
BLOCK_ROWS = 25_000

GROUP_NAMES = ("control", "dose_low", "dose_mid", "dose_high")
GROUP_SHARES = (0.4, 0.3, 0.2, 0.1)
FACTOR_SD = np.array([3.0, 2.2, 1.6, 1.2, 1.0])
NOISE_DF = 6


def table_key(name):
    """A stable integer for a table name, used in seeding."""
    return int.from_bytes(name.encode("ascii"), "little")


def spec_of(name):
    rows, cols, missing = TABLES[name]
    return {
        "table": name,
        "rows": rows,
        "features": cols,
        "missing_share": missing,
        "seed": SEED,
        "generator_version": GENERATOR_VERSION,
        "numpy": np.__version__,
    }


def column_model(name, cols):
    """Per-column parameters shared by every block of one table."""
    rng = np.random.default_rng([SEED, table_key(name), 1])
    k = len(FACTOR_SD)
    mixing = rng.standard_normal((k, cols))
    # Group shifts of the latent factors; the first two carry most of the
    # separation, so a PC1/PC2 plot coloured by group shows it.
    shifts = rng.normal(0.0, 1.0, size=(len(GROUP_NAMES), k))
    shifts[:, :2] *= 2.0
    noise_sd = rng.uniform(0.7, 2.0, size=cols)
    log10_unit = rng.uniform(-2.0, 4.0, size=cols)
    unit = 10.0 ** log10_unit
    positive = rng.random(cols) < 0.5
    base = np.where(positive, rng.uniform(5.0, 15.0, cols), rng.uniform(-2.0, 2.0, cols))
    decimals = np.clip(5 - np.floor(log10_unit).astype(np.int64), 0, 8)
    return {
        "mixing": mixing,
        "shifts": shifts,
        "noise_sd": noise_sd,
        "unit": unit,
        "offset": base * unit,
        "decimals": decimals,
    }


def header_line(cols):
    width = max(4, len(str(cols)))
    names = ["sample_id", "group"] + [f"x{j:0{width}d}" for j in range(1, cols + 1)]
    return ",".join(names) + "\n"


def render_block(job):
    """Make one block of rows and return it as CSV text (no header)."""
    name, block, first_row, nrows, cols, missing, model = job
    rng = np.random.default_rng([SEED, table_key(name), 1000 + block])
    group = rng.choice(len(GROUP_NAMES), size=nrows, p=GROUP_SHARES)
    latent = model["shifts"][group] + rng.standard_normal((nrows, len(FACTOR_SD))) * FACTOR_SD
    values = latent @ model["mixing"]
    values += rng.standard_t(NOISE_DF, size=(nrows, cols)) * model["noise_sd"]
    values *= model["unit"]
    values += model["offset"]
    hole = rng.random((nrows, cols)) < missing if missing > 0 else None

    # Text of each column: rounded to that column's decimals, then the
    # shortest text that reads back to the rounded value.
    text = np.empty((nrows, cols), dtype=object)
    for j in range(cols):
        col = np.round(values[:, j], int(model["decimals"][j]))
        text[:, j] = [repr(v) for v in col.tolist()]
    if hole is not None:
        text[hole] = ""
    labels = np.asarray(GROUP_NAMES, dtype=object)[group]
    out = []
    for i in range(nrows):
        out.append(f"{name}{first_row + i:08d},{labels[i]},")
        out.append(",".join(text[i]))
        out.append("\n")
    return "".join(out)


def file_sha256(path):
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for piece in iter(lambda: f.read(1 << 22), b""):
            digest.update(piece)
    return digest.hexdigest()


def is_current(name, path):
    meta_path = path + ".json"
    if not (os.path.exists(path) and os.path.exists(meta_path)):
        return False
    try:
        with open(meta_path) as f:
            meta = json.load(f)
    except (OSError, ValueError):
        return False
    if meta.get("spec") != spec_of(name):
        return False
    if os.path.getsize(path) != meta.get("bytes"):
        return False
    return file_sha256(path) == meta.get("sha256")


def write_table(name, out_dir, workers):
    rows, cols, missing = TABLES[name]
    model = column_model(name, cols)
    jobs = []
    for block, first in enumerate(range(0, rows, BLOCK_ROWS)):
        jobs.append((name, block, first + 1, min(BLOCK_ROWS, rows - first), cols, missing, model))
    path = os.path.join(out_dir, f"{name}.csv")
    partial = path + ".partial"
    with open(partial, "w", encoding="ascii", newline="") as f:
        f.write(header_line(cols))
        if workers > 1 and len(jobs) > 1:
            with multiprocessing.get_context("fork").Pool(workers) as pool:
                for chunk in pool.imap(render_block, jobs, chunksize=1):
                    f.write(chunk)
        else:
            for job in jobs:
                f.write(render_block(job))
    os.replace(partial, path)
    meta = {"spec": spec_of(name), "bytes": os.path.getsize(path), "sha256": file_sha256(path)}
    with open(path + ".json", "w") as f:
        json.dump(meta, f, indent=1, sort_keys=True)
        f.write("\n")
    return meta


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("tables", nargs="+", choices=sorted(TABLES))
    ap.add_argument("--out", required=True, help="folder for the tables")
    ap.add_argument("--workers", type=int, default=min(2, os.cpu_count() or 1))
    ap.add_argument("--force", action="store_true", help="write the tables even if they are current")
    a = ap.parse_args(argv)
    os.makedirs(a.out, exist_ok=True)
    for name in a.tables:
        path = os.path.join(a.out, f"{name}.csv")
        if not a.force and is_current(name, path):
            print(f"{name}: up to date ({os.path.getsize(path) / 1e6:.1f} MB)", flush=True)
            continue
        meta = write_table(name, a.out, a.workers)
        rows, cols, missing = TABLES[name]
        print(f"{name}: wrote {rows} x {cols} (+ id, group), missing {missing:g}, "
              f"{meta['bytes'] / 1e6:.1f} MB, sha256 {meta['sha256'][:16]}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
