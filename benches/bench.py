#!/usr/bin/env python3
"""sextant's benchmark: whole-process time and peak memory against a Python script.

For each chosen table it

  * makes the synthetic CSV once (benches/make_tables.py; kept while its
    recorded SHA-256 still matches) and writes a recipe beside it;
  * runs ``sextant run`` on that recipe and ``benches/reference_pipeline.py``
    (pandas + scikit-learn + matplotlib) on the same table, alternately,
    ``--runs`` times each;
  * measures each run as a whole child process: wall-clock time, and peak
    resident memory from the kernel's accounting of the finished child
    (``os.wait4``, the child's ``ru_maxrss``);
  * prints medians, the ratios reference / sextant, per-step medians, and the
    same tables again as markdown.

It also times ``sextant check`` on the large table (reading and parsing every
cell, no decomposition) to give an ingest rate in MB/s, and sets the
reference's figures beside the yardstick quoted in the benchmark issue.

Only the Python standard library is needed to start it; the tables and the
reference script run in a virtual environment (``target/bench-venv``) that is
made, with numpy, pandas, scikit-learn and matplotlib, when missing.

    python3 benches/bench.py                       # S, M, W, P, 3 runs each, ingest on L
    python3 benches/bench.py --tables S,M,L,W,P --runs 3 --runs-large 1
    python3 benches/bench.py --tables M --runs 5 --sextant target/release/sextant --no-build
"""
import argparse
import csv
import hashlib
import json
import os
import re
import shutil
import signal
import statistics
import subprocess
import sys
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
TABLE_ORDER = ["S", "M", "L", "W", "P"]
LARGE = {"L"}
# rows, features, missing share: must agree with make_tables.TABLES
SHAPES = {
    "S": (10_000, 20, 0.0),
    "M": (200_000, 50, 0.01),
    "L": (1_000_000, 100, 0.01),
    "W": (500, 5_000, 0.0),
    "P": (5_000, 1_000, 0.0),
}
# The reference pipeline's whole-process medians quoted in the benchmark
# issue, measured on a 2-core machine like this one: (wall s, peak GB).
YARDSTICK = {
    "M": ("13-14 s", (13.0, 14.0), None),
    "L": ("57 s, 2.8 GB", (57.0, 57.0), 2.8),
    "W": ("4.1 s", (4.1, 4.1), None),
}
PY_PACKAGES = ["numpy", "pandas", "scikit-learn", "matplotlib"]
PY_IMPORTS = "import numpy, pandas, sklearn, matplotlib"


def rel(path):
    return os.path.relpath(path, ROOT)


def say(*parts):
    print(*parts, file=sys.stderr, flush=True)


# ---------------------------------------------------------------- set-up

def python_env(venv):
    """The venv's interpreter, after making the venv and installing what is missing."""
    py = os.path.join(venv, "bin", "python")
    if not os.path.exists(py):
        say(f"making the virtual environment {rel(venv)}")
        subprocess.run([sys.executable, "-m", "venv", venv], check=True)
    if subprocess.run([py, "-c", PY_IMPORTS], capture_output=True).returncode != 0:
        say(f"installing {', '.join(PY_PACKAGES)} into {rel(venv)}")
        subprocess.run([py, "-m", "pip", "install", "--quiet", "--upgrade", "pip"], check=True)
        subprocess.run([py, "-m", "pip", "install", "--quiet"] + PY_PACKAGES, check=True)
    return py


def build_sextant():
    say("building sextant: cargo build --release")
    subprocess.run(["cargo", "build", "--release", "--quiet"], cwd=ROOT, check=True)


def recipe_text(name):
    return f"""# Written by benches/bench.py: the benchmark's analysis of table {name}.
format = 1
title = "benchmark table {name}"

[input]
file = "{name}.csv"
id = "sample_id"
groups = ["group"]

[missing]
method = "mean"

[scaling]
method = "unit-variance"

[components]
keep = 10

[[plot]]
kind = "scree"

[[plot]]
kind = "scores"
x = 1
y = 2
color = "group"

[output]
folder = "out/{name}-sextant"
"""


def write_recipe(data, name):
    path = os.path.join(data, f"{name}.toml")
    text = recipe_text(name)
    old = None
    if os.path.exists(path):
        with open(path) as f:
            old = f.read()
    if old != text:
        with open(path, "w") as f:
            f.write(text)
    return path


# ---------------------------------------------------------------- measuring

class Run:
    def __init__(self, wall, cpu, peak_kib, code, timed_out, stderr):
        self.wall = wall
        self.cpu = cpu
        self.peak_mib = peak_kib / 1024.0
        self.code = code
        self.timed_out = timed_out
        self.stderr = stderr


def measure(argv, log_path, env=None, cwd=None, timeout=None):
    """Run argv as a child; wall time, its peak RSS (wait4) and exit status."""
    with open(log_path + ".out", "w") as out, open(log_path + ".err", "w") as err:
        start = time.perf_counter()
        child = subprocess.Popen(argv, stdout=out, stderr=err, env=env, cwd=cwd)
        killed = threading.Event()

        def kill():
            killed.set()
            try:
                os.kill(child.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass

        timer = threading.Timer(timeout, kill) if timeout else None
        if timer:
            timer.start()
        _, status, usage = os.wait4(child.pid, 0)
        wall = time.perf_counter() - start
        if timer:
            timer.cancel()
        child.returncode = os.waitstatus_to_exitcode(status)  # already reaped
    with open(log_path + ".err") as f:
        stderr = f.read()
    return Run(wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss, child.returncode, killed.is_set(), stderr)


TIMING_LINE = re.compile(r"^timing\s+([0-9.]+) s\s+(.+)$")


def sextant_steps(stderr):
    steps = {}
    for line in stderr.splitlines():
        m = TIMING_LINE.match(line.strip())
        if m:
            steps[m.group(2)] = steps.get(m.group(2), 0.0) + float(m.group(1))
    return steps


def file_digest(path):
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for piece in iter(lambda: f.read(1 << 22), b""):
            digest.update(piece)
    return digest.hexdigest()


def load_average():
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def median_steps(list_of_dicts):
    keys = []
    for d in list_of_dicts:
        for k in d:
            if k not in keys:
                keys.append(k)
    return {k: statistics.median([d[k] for d in list_of_dicts if k in d]) for k in keys}


def variance_shares(path, column):
    try:
        with open(path, newline="") as f:
            return [float(r[column]) for r in csv.DictReader(f)]
    except (OSError, KeyError, ValueError):
        return None


# ---------------------------------------------------------------- one table

def bench_table(name, a, py, sextant, data, logs):
    rows, cols, _ = SHAPES[name]
    table = os.path.join(data, f"{name}.csv")
    recipe = write_recipe(data, name)
    ref_out = os.path.join(data, "out", f"{name}-reference")
    sx_out = os.path.join(data, "out", f"{name}-sextant")
    timings_file = os.path.join(logs, f"{name}-reference-steps.jsonl")
    if os.path.exists(timings_file):
        os.remove(timings_file)
    runs = a.runs_large if name in LARGE else a.runs
    env = dict(os.environ, SEXTANT_TIMING="1")
    result = {"table": name, "rows": rows, "features": cols, "bytes": os.path.getsize(table),
              "runs": runs, "sextant": [], "reference": [], "load": []}
    ref_argv = [py, os.path.join(HERE, "reference_pipeline.py"), table, "--out", ref_out, "--k", "10",
                "--solver", a.ref_solver, "--formats", a.ref_formats, "--timings", timings_file]
    sx_argv = [sextant, "run", recipe]
    for i in range(1, runs + 1):
        for who in a.order:
            if who == "sextant" and not a.skip_sextant:
                shutil.rmtree(sx_out, ignore_errors=True)
                result["load"].append(load_average())
                r = measure(sx_argv, os.path.join(logs, f"{name}-sextant-{i}"), env=env, timeout=a.timeout)
                status = "killed after timeout" if r.timed_out else f"exit {r.code}"
                say(f"  {name} sextant   run {i}/{runs}: {r.wall:8.2f} s  {r.peak_mib:8.0f} MiB  {status}")
                result["sextant"].append(r)
                if r.code != 0:
                    say("    " + r.stderr.strip().replace("\n", "\n    ")[-2000:])
            if who == "reference" and not a.skip_reference:
                shutil.rmtree(ref_out, ignore_errors=True)
                result["load"].append(load_average())
                r = measure(ref_argv, os.path.join(logs, f"{name}-reference-{i}"), timeout=a.timeout)
                status = "killed after timeout" if r.timed_out else f"exit {r.code}"
                say(f"  {name} reference run {i}/{runs}: {r.wall:8.2f} s  {r.peak_mib:8.0f} MiB  {status}")
                result["reference"].append(r)
                if r.code != 0:
                    say("    " + r.stderr.strip().replace("\n", "\n    ")[-2000:])
    ok_sx = [r for r in result["sextant"] if r.code == 0]
    ok_ref = [r for r in result["reference"] if r.code == 0]
    result["sextant_steps"] = median_steps([sextant_steps(r.stderr) for r in ok_sx]) if ok_sx else {}
    ref_steps = []
    if os.path.exists(timings_file):
        with open(timings_file) as f:
            ref_steps = [json.loads(line) for line in f if line.strip()]
    result["reference_steps"] = median_steps([r["seconds"] for r in ref_steps]) if ref_steps else {}
    result["reference_solver_used"] = ref_steps[-1].get("solver_used") if ref_steps else None
    result["reference_versions"] = ref_steps[-1].get("versions") if ref_steps else None
    # Same analysis? Compare the shares of variance of the ten components.
    a_sh = variance_shares(os.path.join(sx_out, "variance.csv"), "share") if ok_sx else None
    b_sh = variance_shares(os.path.join(ref_out, "variance.csv"), "share") if ok_ref else None
    if a_sh and b_sh:
        n = min(len(a_sh), len(b_sh))
        result["share_max_abs_diff"] = max(abs(a_sh[i] - b_sh[i]) for i in range(n))
    return result


def ingest(name, a, sextant, data, logs):
    table = os.path.join(data, f"{name}.csv")
    recipe = write_recipe(data, name)
    size = os.path.getsize(table)
    env = dict(os.environ, SEXTANT_TIMING="1")
    runs = []
    for i in range(1, a.runs_large + 1):
        r = measure([sextant, "check", recipe], os.path.join(logs, f"{name}-check-{i}"), env=env,
                    timeout=a.timeout)
        say(f"  {name} sextant check run {i}/{a.runs_large}: {r.wall:8.2f} s  {r.peak_mib:8.0f} MiB  exit {r.code}")
        if r.code != 0:
            say("    " + r.stderr.strip().replace("\n", "\n    ")[-2000:])
        runs.append(r)
    ok = [r for r in runs if r.code == 0]
    if not ok:
        return {"table": name, "bytes": size, "failed": True}
    wall = statistics.median(r.wall for r in ok)
    steps = median_steps([sextant_steps(r.stderr) for r in ok])
    # The steps before the plan check: reading, hashing and parsing the bytes
    # (sextant has named and grouped them differently across versions).
    # Top-level steps only: indented steps and "(total)" lines are parts of one.
    top = {k: v for k, v in steps.items() if not k.endswith("(total)") and not k.startswith(" ")}
    read_parse = sum(v for k, v in top.items() if any(w in k for w in ("read", "hash", "parse")))
    return {"table": name, "bytes": size, "runs": len(ok), "wall": wall,
            "peak_mib": statistics.median(r.peak_mib for r in ok),
            "mb_per_s": size / 1e6 / wall, "steps": steps,
            "read_parse_s": read_parse or None,
            "parse_mb_per_s": (size / 1e6 / read_parse) if read_parse else None}


# ---------------------------------------------------------------- reporting

def fmt_s(x):
    if x is None:
        return "-"
    return f"{x:.2f}" if x < 10 else f"{x:.1f}"


def fmt_mib(x):
    if x is None:
        return "-"
    return f"{x / 1024:.2f} GiB" if x >= 1024 else f"{x:.0f} MiB"


def fmt_ratio(x):
    return "-" if x is None else f"{x:.1f}x"


def summary_rows(results):
    out = []
    for r in results:
        sx = [x for x in r["sextant"] if x.code == 0]
        rf = [x for x in r["reference"] if x.code == 0]
        sw = statistics.median(x.wall for x in sx) if sx else None
        rw = statistics.median(x.wall for x in rf) if rf else None
        sm = statistics.median(x.peak_mib for x in sx) if sx else None
        rm = statistics.median(x.peak_mib for x in rf) if rf else None
        note = []
        if any(x.code != 0 for x in r["sextant"]):
            note.append("sextant failed" if not any(x.timed_out for x in r["sextant"]) else "sextant timed out")
        if any(x.code != 0 for x in r["reference"]):
            note.append("reference failed")
        out.append([
            r["table"], f"{r['rows']:,} x {r['features']:,}", f"{r['bytes'] / 1e6:.0f}",
            str(len(sx) or len(r["sextant"])),
            fmt_s(sw), fmt_s(rw), fmt_ratio(rw / sw if sw and rw else None),
            fmt_mib(sm), fmt_mib(rm), fmt_ratio(rm / sm if sm and rm else None),
            "; ".join(note),
        ])
    return out


SUMMARY_HEAD = ["table", "rows x features", "MB", "runs", "sextant s", "reference s", "time ratio",
                "sextant peak", "reference peak", "memory ratio", "note"]


def plain_table(head, rows):
    widths = [max(len(str(x)) for x in col) for col in zip(head, *rows)]
    lines = ["  ".join(str(x).rjust(w) for x, w in zip(head, widths))]
    lines.append("  ".join("-" * w for w in widths))
    for row in rows:
        lines.append("  ".join(str(x).rjust(w) for x, w in zip(row, widths)))
    return "\n".join(lines)


def md_table(head, rows):
    lines = ["| " + " | ".join(head) + " |", "|" + "|".join("---" for _ in head) + "|"]
    for row in rows:
        lines.append("| " + " | ".join(str(x) for x in row) + " |")
    return "\n".join(lines)


def cpu_rows(results):
    out = []
    for r in results:
        sx = [x for x in r["sextant"] if x.code == 0]
        rf = [x for x in r["reference"] if x.code == 0]
        sc = statistics.median(x.cpu for x in sx) if sx else None
        rc = statistics.median(x.cpu for x in rf) if rf else None
        sw = statistics.median(x.wall for x in sx) if sx else None
        out.append([r["table"], fmt_s(sc), fmt_s(rc), fmt_ratio(rc / sc if sc and rc else None),
                    f"{sc / sw:.2f}" if sc and sw else "-"])
    return out


CPU_HEAD = ["table", "sextant cpu s", "reference cpu s", "cpu ratio", "sextant cpu/wall"]


def step_rows(results):
    out = []
    for r in results:
        if r["sextant_steps"]:
            out.append([r["table"], "sextant", ", ".join(f"{k} {fmt_s(v)}" for k, v in r["sextant_steps"].items())])
        if r["reference_steps"]:
            solver = r.get("reference_solver_used")
            label = f"reference ({solver})" if solver else "reference"
            out.append([r["table"], label, ", ".join(f"{k} {fmt_s(v)}" for k, v in r["reference_steps"].items())])
    return out


def yardstick_rows(results):
    out = []
    for r in results:
        if r["table"] not in YARDSTICK:
            continue
        text, (lo, hi), gb = YARDSTICK[r["table"]]
        rf = [x for x in r["reference"] if x.code == 0]
        if not rf:
            continue
        w = statistics.median(x.wall for x in rf)
        m = statistics.median(x.peak_mib for x in rf)
        mid = (lo + hi) / 2
        verdict = f"{(w - mid) / mid:+.0%} time"
        if gb:
            verdict += f", {(m * 1.048576 / 1000 - gb) / gb:+.0%} memory"  # MiB -> GB
        out.append([r["table"], text, f"{fmt_s(w)} s, {m * 1.048576 / 1000:.2f} GB", verdict])
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--tables", default="S,M,W,P", help="comma-separated, from S,M,L,W,P (default S,M,W,P)")
    ap.add_argument("--runs", type=int, default=3, help="runs per tool and table (default 3)")
    ap.add_argument("--runs-large", type=int, default=1,
                    help="runs per tool on L, and of the ingest check (default 1)")
    ap.add_argument("--sextant", help="the sextant binary (default: build target/release/sextant)")
    ap.add_argument("--no-build", action="store_true", help="do not run cargo build --release first")
    ap.add_argument("--data", default=os.path.join(ROOT, "target", "bench-data"),
                    help="tables, recipes, results and logs (default target/bench-data)")
    ap.add_argument("--venv", default=os.path.join(ROOT, "target", "bench-venv"),
                    help="virtual environment for the Python side (default target/bench-venv)")
    ap.add_argument("--ingest", default="L", help="table for the `sextant check` ingest rate, or 'none'")
    ap.add_argument("--ref-solver", default="full",
                    help="scikit-learn svd_solver for the reference (default full, as in the yardstick)")
    ap.add_argument("--ref-formats", default="png,svg", help="reference figure formats (default png,svg)")
    ap.add_argument("--skip-sextant", action="store_true")
    ap.add_argument("--skip-reference", action="store_true")
    ap.add_argument("--timeout", type=float, default=1800, help="kill a run after this many seconds")
    ap.add_argument("--json", help="also write the raw measurements here")
    ap.add_argument("--markdown", help="also write the markdown tables here")
    a = ap.parse_args(argv)

    names = [t.strip().upper() for t in a.tables.split(",") if t.strip()]
    unknown = [t for t in names if t not in SHAPES]
    if unknown:
        ap.error(f"unknown table(s) {', '.join(unknown)}; choose from {','.join(TABLE_ORDER)}")
    if a.runs < 1 or a.runs_large < 1:
        ap.error("--runs and --runs-large must be at least 1")
    a.order = ["sextant", "reference"]
    ingest_name = None if a.ingest.lower() == "none" else a.ingest.upper()
    if ingest_name and ingest_name not in SHAPES:
        ap.error(f"--ingest: unknown table {a.ingest}")

    data = os.path.abspath(a.data)
    logs = os.path.join(data, "logs")
    os.makedirs(logs, exist_ok=True)
    if a.sextant:
        sextant = os.path.abspath(a.sextant)
    else:
        sextant = os.path.join(ROOT, "target", "release", "sextant")
        if not a.no_build:
            build_sextant()
    if not a.skip_sextant and not os.access(sextant, os.X_OK):
        sys.exit(f"no sextant binary at {rel(sextant)}")
    built = sextant
    if os.access(sextant, os.X_OK):
        # Time a private copy, so that a rebuild of target/release during the
        # benchmark cannot mix two versions in one set of figures.
        snapshot = os.path.join(data, "sextant-under-test")
        shutil.copy2(sextant, snapshot)
        sextant = snapshot
    py = python_env(os.path.abspath(a.venv))

    needed = list(dict.fromkeys(names + ([ingest_name] if ingest_name else [])))
    say(f"tables: {', '.join(needed)} (made once, then reused)")
    subprocess.run([py, os.path.join(HERE, "make_tables.py"), "--out", data] + needed, check=True)

    version = subprocess.run([sextant, "--version"], capture_output=True, text=True).stdout.strip() \
        if os.access(sextant, os.X_OK) else "-"
    results = []
    for name in [t for t in TABLE_ORDER if t in names]:
        say(f"table {name}")
        results.append(bench_table(name, a, py, sextant, data, logs))
    ing = None
    if ingest_name and not a.skip_sextant:
        say(f"ingest: sextant check {ingest_name}")
        ing = ingest(ingest_name, a, sextant, data, logs)

    summary = summary_rows(results)
    steps = step_rows(results)
    yard = yardstick_rows(results)
    versions = next((r["reference_versions"] for r in results if r.get("reference_versions")), None)
    loads = [x for r in results for x in r["load"]]
    digest = file_digest(sextant)[:12] if os.path.exists(sextant) else "-"
    context = [f"sextant: {version} ({rel(built)}, sha256 {digest})"]
    if versions:
        context.append("reference: " + ", ".join(f"{k} {v}" for k, v in versions.items())
                       + f"; svd_solver={a.ref_solver}; figures {a.ref_formats}")
    context.append(f"cores: {os.cpu_count()}; 1-minute load average before runs: "
                   + (f"{min(loads):.1f} to {max(loads):.1f}" if loads else "-"))
    context.append("times: median whole-process wall clock; cpu: the child's user + system time; "
                   "peak: the child's ru_maxrss (os.wait4); medians over runs")

    print()
    print("\n".join(context))
    print()
    print(plain_table(SUMMARY_HEAD, summary))
    print("ratio = reference / sextant (above 1: sextant is faster or smaller)")
    print()
    print("CPU time (user + system, median), less sensitive than wall time to other load on the machine")
    print(plain_table(CPU_HEAD, cpu_rows(results)))
    same = [f"{r['table']} {r['share_max_abs_diff']:.1e}" for r in results if "share_max_abs_diff" in r]
    if same:
        print("largest difference in variance share, sextant vs reference: " + ", ".join(same))
    if ing:
        print()
        if ing.get("failed"):
            print(f"ingest: sextant check {ing['table']} failed")
        else:
            line = (f"ingest: sextant check {ing['table']} ({ing['bytes'] / 1e6:.0f} MB): {fmt_s(ing['wall'])} s, "
                    f"{ing['mb_per_s']:.0f} MB/s whole process, peak {fmt_mib(ing['peak_mib'])}")
            if ing.get("parse_mb_per_s"):
                line += (f"; read + hash + parse steps {fmt_s(ing['read_parse_s'])} s = "
                         f"{ing['parse_mb_per_s']:.0f} MB/s")
            print(line)
    if steps:
        print()
        print("median seconds per step")
        for t, who, text in steps:
            print(f"  {t} {who}: {text}")
    if yard:
        print()
        print(plain_table(["table", "yardstick (reference)", "measured here", "difference"], yard))

    md = ["\n".join("- " + c for c in context), "", md_table(SUMMARY_HEAD, summary), "",
          "Ratios are reference / sextant.", "", md_table(CPU_HEAD, cpu_rows(results))]
    if ing and not ing.get("failed"):
        md += ["", f"Ingest (`sextant check` on {ing['table']}, {ing['bytes'] / 1e6:.0f} MB): "
               f"{fmt_s(ing['wall'])} s, {ing['mb_per_s']:.0f} MB/s, peak {fmt_mib(ing['peak_mib'])}"
               + (f"; its read + hash + parse steps alone {ing['parse_mb_per_s']:.0f} MB/s."
                  if ing.get("parse_mb_per_s") else ".")]
    if steps:
        md += ["", md_table(["table", "tool", "median seconds per step"], steps)]
    if yard:
        md += ["", md_table(["table", "yardstick (reference)", "measured here", "difference"], yard)]
    md_text = "\n".join(md) + "\n"
    print()
    print("markdown:")
    print()
    print(md_text)
    if a.markdown:
        with open(a.markdown, "w") as f:
            f.write(md_text)
    if a.json:
        def plain(r):
            d = dict(r)
            for who in ("sextant", "reference"):
                d[who] = [{"wall_s": x.wall, "cpu_s": x.cpu, "peak_mib": x.peak_mib, "exit": x.code, "timed_out": x.timed_out}
                          for x in r[who]]
            return d
        with open(a.json, "w") as f:
            json.dump({"context": context, "tables": [plain(r) for r in results], "ingest": ing}, f, indent=1)
            f.write("\n")
    failed = any(x.code != 0 for r in results for x in r["sextant"] + r["reference"])
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
