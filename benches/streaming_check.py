#!/usr/bin/env python3
"""Checks that a table larger than the memory budget is analysed within it.

It builds a CSV of about 2 GB (table L of the benchmark, 1,000,000 x 100, repeated
with new ids until the size is reached), runs ``sextant run`` on it with a memory
budget below what the in-memory engine would need (about 4 x the file size), and
reads the child's peak resident memory from the kernel (``os.wait4``). It exits
with 1 when the run fails or its peak passes the budget.

With ``--compare`` it also runs the in-memory engine on the same table (this
needs about 4 x the file size of memory) and checks that every result file is
the same bytes.

With ``--flat`` it runs the same recipe on a table of half the size too, and
checks that the peak does not grow with the rows: doubling the rows may add at
most 5 % of the smaller peak plus 16 MB (allocator noise), i.e. a few bytes per
row at most, where holding anything per row would add tens.

    python3 benches/streaming_check.py                     # 2 GB table, 1.5 GB budget
    python3 benches/streaming_check.py --gb 2 --budget 2GB --compare
    python3 benches/streaming_check.py --gb 2 --budget 256MB --flat
"""
import argparse
import json
import os
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)


def build_table(source, target, size):
    """Copies the source table's rows, with ids made unique per copy, until `size` bytes."""
    if os.path.exists(target) and os.path.getsize(target) >= size:
        return
    tmp = target + ".partial"
    with open(source, "rb") as src, open(tmp, "wb") as out:
        header = src.readline()
        out.write(header)
        written = len(header)
        copy = 0
        while written < size:
            src.seek(len(header))
            for line in src:
                # Ids look like L00000001: each copy gets its own prefix.
                row = b"C%d" % copy + line[1:]
                out.write(row)
                written += len(row)
                if written >= size:
                    break
            copy += 1
    os.replace(tmp, target)


def run(argv, cwd):
    """Runs a child; returns (seconds, peak RSS in bytes, exit code, stderr)."""
    start = time.monotonic()
    child = subprocess.Popen(argv, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    stderr = child.stderr.read()
    _, status, usage = os.wait4(child.pid, 0)
    wall = time.monotonic() - start
    return wall, usage.ru_maxrss * 1024, os.waitstatus_to_exitcode(status), stderr.decode()


def folder_files(folder):
    files = {}
    for base, _, names in os.walk(folder):
        for name in names:
            path = os.path.join(base, name)
            with open(path, "rb") as f:
                data = f.read()
            rel = os.path.relpath(path, folder)
            if rel == "manifest.json":
                manifest = json.loads(data)
                manifest.pop("run", None)  # time and host: not hashed
                data = json.dumps(manifest, sort_keys=True).encode()
            files[rel] = data
    return files


def size_arg(text):
    units = {"kb": 1e3, "mb": 1e6, "gb": 1e9, "kib": 1024, "mib": 1024**2, "gib": 1024**3}
    t = text.strip().lower()
    for unit, scale in sorted(units.items(), key=lambda u: -len(u[0])):
        if t.endswith(unit):
            return int(float(t[: -len(unit)]) * scale)
    return int(t)


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--gb", type=float, default=2.0, help="size of the table in GB (default 2)")
    ap.add_argument("--budget", default="1.5GB", help="memory budget given to sextant (default 1.5GB)")
    ap.add_argument("--data", default=os.path.join(ROOT, "target", "bench-data"))
    ap.add_argument("--sextant", default=os.path.join(ROOT, "target", "release", "sextant"))
    ap.add_argument("--compare", action="store_true", help="also run in memory and compare the results")
    ap.add_argument("--flat", action="store_true", help="also run a table of half the size and compare the peaks")
    a = ap.parse_args()

    os.makedirs(a.data, exist_ok=True)
    source = os.path.join(a.data, "L.csv")
    if not os.path.exists(source):
        subprocess.run([sys.executable, os.path.join(HERE, "make_tables.py"), "L", "--out", a.data], check=True)
    table = os.path.join(a.data, "XL.csv")
    print(f"building {table} ({a.gb:g} GB) from L.csv", file=sys.stderr)
    build_table(source, table, int(a.gb * 1e9))
    size = os.path.getsize(table)
    write_recipe(a.data, "XL")
    budget = size_arg(a.budget)
    wall, peak, code, stderr = run(
        [a.sextant, "run", "--replace", "XL.toml", "--memory-budget", a.budget], a.data
    )
    ok = code == 0 and peak <= budget
    print(f"table      {size / 1e9:.2f} GB ({table})")
    print(f"in memory  would need about {4 * size / 1e9:.1f} GB (4 x the file)")
    print(f"budget     {budget / 1e9:.2f} GB (--memory-budget {a.budget})")
    print(f"run        {wall:.1f} s, peak {peak / 1e9:.2f} GB, exit {code}")
    if code != 0:
        print(stderr, file=sys.stderr)
    if a.compare and code == 0:
        passes = folder_files(os.path.join(a.data, "out", "XL-sextant"))
        os.rename(os.path.join(a.data, "out", "XL-sextant"), os.path.join(a.data, "out", "XL-passes"))
        wall2, peak2, code2, stderr2 = run(
            [a.sextant, "run", "XL.toml", "--engine", "in-memory"], a.data
        )
        memory = folder_files(os.path.join(a.data, "out", "XL-sextant")) if code2 == 0 else {}
        same = code2 == 0 and passes == memory
        print(f"in memory  {wall2:.1f} s, peak {peak2 / 1e9:.2f} GB, exit {code2}; "
              f"results {'identical' if same else 'DIFFERENT'} ({len(memory)} files)")
        subprocess.run(["rm", "-rf", os.path.join(a.data, "out", "XL-passes")])
        ok = ok and same
    if a.flat and code == 0:
        half = os.path.join(a.data, "XL-half.csv")
        build_table(source, half, int(a.gb * 1e9 / 2))
        write_recipe(a.data, "XL-half")
        wall3, peak3, code3, stderr3 = run(
            [a.sextant, "run", "--replace", "XL-half.toml", "--memory-budget", a.budget], a.data
        )
        if code3 != 0:
            print(stderr3, file=sys.stderr)
        rows, rows_half = count_rows(table), count_rows(half)
        per_row = (peak - peak3) / max(rows - rows_half, 1)
        flat = code3 == 0 and peak - peak3 <= 0.05 * peak3 + 16e6
        print(f"half size  {os.path.getsize(half) / 1e9:.2f} GB, {rows_half} rows: {wall3:.1f} s, peak {peak3 / 1e9:.3f} GB")
        print(f"full size  {rows} rows: peak {peak / 1e9:.3f} GB; {per_row:+.1f} bytes per extra row "
              f"({'flat' if flat else 'GROWS with the rows'})")
        ok = ok and flat
    print("PASS: the run stayed within its budget" if ok else "FAIL")
    return 0 if ok else 1


def write_recipe(data, name):
    """The benchmark's recipe for table `name`.csv, results in out/`name`-sextant."""
    with open(os.path.join(data, f"{name}.toml"), "w") as f:
        f.write(
            "# Written by benches/streaming_check.py: a table larger than the memory budget.\n"
            f'format = 1\ntitle = "streaming check"\n\n[input]\nfile = "{name}.csv"\nid = "sample_id"\n'
            'groups = ["group"]\n\n[missing]\nmethod = "mean"\n\n[scaling]\nmethod = "unit-variance"\n\n'
            '[components]\nkeep = 10\n\n[[plot]]\nkind = "scree"\n\n[[plot]]\nkind = "scores"\nx = 1\ny = 2\n'
            'color = "group"\n\n[[plot]]\nkind = "biplot"\nx = 1\ny = 2\n\n[[plot]]\nkind = "outlier-map"\n\n'
            f'[output]\nfolder = "out/{name}-sextant"\n'
        )


def count_rows(path):
    """Data rows of a CSV with one record per line (the benchmark's tables)."""
    with open(path, "rb") as f:
        return sum(chunk.count(b"\n") for chunk in iter(lambda: f.read(1 << 24), b"")) - 1


if __name__ == "__main__":
    sys.exit(main())
