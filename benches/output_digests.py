#!/usr/bin/env python3
"""Prints the SHA-256 of every result file of a fixed set of analyses.

A refactor that must not change any output runs this before and after and
compares the two listings with `diff`:

    python3 benches/output_digests.py > before.txt
    ... change the code, rebuild ...
    python3 benches/output_digests.py > after.txt
    diff before.txt after.txt

The set: every recipe in recipes/; a corpus of recipe variants on the open
reference tables in tests/data (every fill method, scaling, transform, rule for
the number of components, SPE limit, plot kind, and both engines), on copies
with cells blanked where a fill method needs gaps; and the benchmark's tables
S, M and W (benches/make_tables.py) with the benchmark's recipe.

manifest.json holds the run's time and host, so it is listed by the digest it
records (which covers everything else it says) instead of by its bytes.
Standard library only. Options: --sextant PATH, --no-bench (skip S, M, W),
--data DIR (where the bench tables are made; default target/bench-data).
"""

import argparse
import hashlib
import json
import os
import shutil
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def blank_cells(src, dst, every):
    """Copies a CSV, emptying every `every`-th numeric cell (fixed pattern)."""
    with open(src) as f:
        lines = f.read().splitlines()
    out = [lines[0]]
    k = 0
    for line in lines[1:]:
        cells = line.split(",")
        for j in range(len(cells) - 1):  # the last column is the class
            k += 1
            if k % every == 0:
                cells[j] = ""
        out.append(",".join(cells))
    with open(dst, "w") as f:
        f.write("\n".join(out) + "\n")


PLOTS = """
[[plot]]
kind = "scree"
[[plot]]
kind = "scores"
color = "class"
ellipse = 0.95
labels = "flagged"
[[plot]]
kind = "loadings"
[[plot]]
kind = "biplot"
color = "class"
[[plot]]
kind = "correlation-circle"
[[plot]]
kind = "outlier-map"
labels = "flagged"
"""


def corpus():
    """(name, table file, recipe body without [input]/[output]) of each case."""
    cases = []
    for scaling in ["none", "center", "unit-variance", "pareto", "range"]:
        cases.append((f"iris-{scaling}", "iris.csv",
                      f'[scaling]\nmethod = "{scaling}"\n[components]\nkeep = 2\n' + PLOTS))
    for keep in ['3', '{ variance = 0.9 }', '"kaiser"', '"broken-stick"',
                 '"parallel-analysis"', '"cross-validation"']:
        tag = keep.strip('"{} ').replace(" ", "").replace("=", "")
        cases.append((f"wine-keep-{tag}", "wine.csv",
                      f'[scaling]\nmethod = "unit-variance"\n[components]\nkeep = {keep}\ncompute = 8\n'
                      + PLOTS))
    for limit in ["jackson-mudholkar", "box"]:
        cases.append((f"wdbc-spe-{limit}", "breast_cancer_wdbc.csv",
                      '[transform]\nlog10 = ["mean_area", "area_error"]\nln = ["mean_radius"]\n'
                      'sqrt = ["mean_texture"]\n[scaling]\nmethod = "unit-variance"\n'
                      f'[components]\nkeep = 4\n[diagnostics]\nconfidence = [0.95, 0.99]\n'
                      f'spe_limit = "{limit}"\n' + PLOTS))
    cases.append(("wdbc-randomized", "breast_cancer_wdbc.csv",
                  '[scaling]\nmethod = "unit-variance"\n[components]\nkeep = 5\n'
                  'method = "randomized"\n[diagnostics]\nspe_limit = "box"\n' + PLOTS))
    for fill in ["drop-rows", "mean", "median", "knn", "iterative-pca"]:
        for name, every in [("wine", 23), ("wdbc", 41)]:
            cases.append((f"{name}-gaps-{fill}", f"{name}-gaps.csv",
                          f'[missing]\nmethod = "{fill}"\n[scaling]\nmethod = "unit-variance"\n'
                          '[components]\nkeep = 3\n' + PLOTS))
    return cases


def run(sextant, args, cwd):
    done = subprocess.run([sextant] + args, cwd=cwd, capture_output=True, text=True,
                          env=dict(os.environ, SEXTANT_NO_PROGRESS="1"))
    if done.returncode != 0:
        sys.exit(f"{' '.join(args)} in {cwd} failed ({done.returncode}):\n{done.stderr}")


def listing(folder, case):
    rows = []
    for dirpath, _, files in os.walk(folder):
        for name in files:
            path = os.path.join(dirpath, name)
            rel = os.path.relpath(path, folder)
            if rel == "manifest.json":
                with open(path) as f:
                    digest = json.load(f)["digest"]
                rows.append(f"{case}  {rel}  digest {digest}")
            else:
                with open(path, "rb") as f:
                    rows.append(f"{case}  {rel}  {hashlib.sha256(f.read()).hexdigest()}")
    return sorted(rows)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sextant", default=os.path.join(ROOT, "target/release/sextant"))
    ap.add_argument("--no-bench", action="store_true")
    ap.add_argument("--data", default=os.path.join(ROOT, "target/bench-data"))
    a = ap.parse_args()
    sextant = os.path.abspath(a.sextant)
    out = []
    with tempfile.TemporaryDirectory() as tmp:
        shutil.copytree(os.path.join(ROOT, "recipes"), os.path.join(tmp, "recipes"))
        shutil.copytree(os.path.join(ROOT, "demo-data"), os.path.join(tmp, "demo-data"))
        for name in sorted(os.listdir(os.path.join(tmp, "recipes"))):
            run(sextant, ["run", f"recipes/{name}", "--replace"], tmp)
        for name in sorted(os.listdir(os.path.join(tmp, "results"))):
            out += listing(os.path.join(tmp, "results", name), f"recipe {name}")

        data = os.path.join(ROOT, "tests/data")
        for f in ["iris.csv", "wine.csv", "breast_cancer_wdbc.csv"]:
            shutil.copy(os.path.join(data, f), tmp)
        blank_cells(os.path.join(data, "wine.csv"), os.path.join(tmp, "wine-gaps.csv"), 23)
        blank_cells(os.path.join(data, "breast_cancer_wdbc.csv"),
                    os.path.join(tmp, "wdbc-gaps.csv"), 41)
        cases = corpus()
        for name, table, body in cases:
            for engine in ["in-memory", "passes"]:
                recipe = os.path.join(tmp, f"{name}.toml")
                with open(recipe, "w") as f:
                    f.write(f'format = 1\n[input]\nfile = "{table}"\ngroups = ["class"]\n'
                            f'{body}\n[output]\nfolder = "out/{name}-{engine}"\n')
                extra = ["--engine", engine]
                if engine == "passes":
                    # the passes engine accepts only what can stream; the rest is
                    # refused, and a refusal is not a result to compare
                    probe = subprocess.run([sextant, "run", recipe] + extra, cwd=tmp,
                                           capture_output=True, text=True,
                                           env=dict(os.environ, SEXTANT_NO_PROGRESS="1"))
                    if probe.returncode != 0:
                        out.append(f"case {name}-{engine}  refused  exit {probe.returncode}")
                        continue
                else:
                    run(sextant, ["run", recipe] + extra, tmp)
                out += listing(os.path.join(tmp, "out", f"{name}-{engine}"), f"case {name}-{engine}")

        if not a.no_bench:
            # the tables need numpy: the benchmark's environment has it
            venv_python = os.path.join(ROOT, "target/bench-venv/bin/python")
            python = venv_python if os.path.exists(venv_python) else sys.executable
            subprocess.run([python, os.path.join(ROOT, "benches/make_tables.py"),
                            "S", "M", "W", "--out", a.data], check=True,
                           stdout=subprocess.DEVNULL)
            sys.path.insert(0, os.path.join(ROOT, "benches"))
            from bench import recipe_text
            for name in ["S", "M", "W"]:
                recipe = os.path.join(tmp, f"bench-{name}.toml")
                # a link beside the recipe, so that no absolute path (which
                # model.json and the manifest record) depends on the checkout
                os.symlink(os.path.join(os.path.abspath(a.data), f"{name}.csv"),
                           os.path.join(tmp, f"{name}.csv"))
                text = recipe_text(name)
                with open(recipe, "w") as f:
                    f.write(text)
                run(sextant, ["run", recipe], tmp)
                out += listing(os.path.join(tmp, "out", f"{name}-sextant"), f"bench {name}")
    print("\n".join(out))


if __name__ == "__main__":
    main()
