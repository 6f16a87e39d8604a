#!/usr/bin/env python3
"""Generator for the sextant demo data set (invented raw-milk quality lab data).

THE DATA WRITTEN BY THIS SCRIPT IS INVENTED. It describes a made-up cooperative
of six small dairy farms whose bulk-tank raw-milk samples are analysed by the
cooperative's quality lab. No farm, sample or measurement is real; the numbers
come from a small statistical model written for this demo (latent "solids",
"udder health", "hygiene" and "energy balance" factors plus farm and season
effects), so that principal component analysis has a few meaningful components
to find.

Outputs (written next to this script):
  dairy-lab-2026-03.csv  main table, 400 samples (summer 2025 and winter 2025/26)
  dairy-lab-2026-04.csv  second, smaller batch of 60 samples collected in
                         April 2026, same columns in a different order

Determinism: everything is drawn from random.Random(SEED) with SEED = 20260314,
in a fixed order, and every numeric column is written with a fixed number of
decimal places. Running

    python3 demo-data/generate.py

from the repository root regenerates byte-identical files. Only the Python 3
standard library is used.

See README.md in this folder for the column descriptions, the missing-data
pattern and the list of deliberately planted problem samples.
"""

import datetime
import math
import os
import random

SEED = 20260314

OUT_DIR = os.path.dirname(os.path.abspath(__file__))
MAIN_FILE = "dairy-lab-2026-03.csv"
BATCH_FILE = "dairy-lab-2026-04.csv"

# --------------------------------------------------------------------------
# Columns and output formatting (decimal places per numeric column).
# --------------------------------------------------------------------------

FEATURES = [
    ("fat_pct", 2),
    ("protein_pct", 2),
    ("casein_pct", 2),
    ("lactose_pct", 2),
    ("snf_pct", 2),
    ("total_solids_pct", 2),
    ("urea_mg_dl", 1),
    ("somatic_cells_k_ml", 0),
    ("bacteria_k_cfu_ml", 1),
    ("freezing_point_mdegc", 0),
    ("ph", 2),
    ("acidity_sh", 2),
    ("density_kg_m3", 2),
    ("conductivity_ms_cm", 2),
    ("calcium_mg_dl", 1),
    ("phosphorus_mg_dl", 1),
    ("citrate_mg_dl", 1),
    ("bhb_mmol_l", 3),
]
DECIMALS = dict(FEATURES)
FEATURE_NAMES = [name for name, _ in FEATURES]

MAIN_COLUMNS = ["sample", "farm", "season", "collected"] + FEATURE_NAMES

# The second batch deliberately uses a different column order.
BATCH_COLUMNS = [
    "sample",
    "collected",
    "season",
    "farm",
    "somatic_cells_k_ml",
    "conductivity_ms_cm",
    "lactose_pct",
    "protein_pct",
    "fat_pct",
    "casein_pct",
    "total_solids_pct",
    "snf_pct",
    "density_kg_m3",
    "freezing_point_mdegc",
    "bacteria_k_cfu_ml",
    "ph",
    "acidity_sh",
    "urea_mg_dl",
    "bhb_mmol_l",
    "calcium_mg_dl",
    "phosphorus_mg_dl",
    "citrate_mg_dl",
]
assert sorted(BATCH_COLUMNS) == sorted(MAIN_COLUMNS)

# Features that are meant to be log-transformed; they must stay > 0 after
# rounding. Value is the smallest value allowed in the file.
POSITIVE_FLOOR = {
    "somatic_cells_k_ml": 1.0,
    "bacteria_k_cfu_ml": 0.1,
    "bhb_mmol_l": 0.005,
    "urea_mg_dl": 1.0,
}

# --------------------------------------------------------------------------
# Invented farms. Offsets are added to the population model below.
#   fat, prot    : % points added to fat and protein (breed / feeding)
#   scc          : median somatic cell count, thousand cells per ml
#   bact         : median total bacteria count, thousand CFU per ml
#   urea         : multiplicative factor on urea
#   bhb          : multiplicative factor on BHB
#   turnout      : day in April 2026 when cows go out to grass (None = stays
#                  housed all month); used only for the second batch
# --------------------------------------------------------------------------

FARMS = [
    ("Alder Hill", dict(fat=0.45, prot=0.20, scc=150, bact=12, urea=1.00, bhb=1.00, turnout=14)),
    ("Brookside", dict(fat=0.00, prot=0.00, scc=210, bact=15, urea=1.05, bhb=1.00, turnout=20)),
    ("Copper Beech", dict(fat=-0.05, prot=-0.02, scc=175, bact=38, urea=0.95, bhb=1.05, turnout=None)),
    ("Dunlin Moss", dict(fat=0.05, prot=0.02, scc=340, bact=18, urea=1.00, bhb=0.95, turnout=24)),
    ("Elderwood", dict(fat=-0.28, prot=-0.12, scc=190, bact=14, urea=0.90, bhb=1.45, turnout=None)),
    ("Foxglove Lane", dict(fat=0.10, prot=0.04, scc=160, bact=9, urea=1.22, bhb=0.85, turnout=9)),
]

# Season effects ("winter" = cows housed, "summer" = grazing).
SEASONS = {
    "winter": dict(fat=0.15, prot=0.06, bact_log10=0.00, urea=0.90, bhb_log10=0.06, lact=-0.02),
    "summer": dict(fat=-0.15, prot=-0.06, bact_log10=0.30, urea=1.18, bhb_log10=-0.06, lact=0.02),
}

# Collection windows of the main table.
WINDOWS = {
    "summer": (datetime.date(2025, 6, 2), datetime.date(2025, 9, 26)),
    "winter": (datetime.date(2025, 12, 1), datetime.date(2026, 3, 13)),
}

# Samples per (farm, season) in the main table; sums to 400.
MAIN_COUNTS = {
    "Alder Hill": (34, 33),
    "Brookside": (35, 34),
    "Copper Beech": (33, 32),
    "Dunlin Moss": (34, 35),
    "Elderwood": (32, 33),
    "Foxglove Lane": (33, 32),
}  # (summer, winter)

BATCH_COUNTS = {
    "Alder Hill": 10,
    "Brookside": 10,
    "Copper Beech": 10,
    "Dunlin Moss": 10,
    "Elderwood": 10,
    "Foxglove Lane": 10,
}

# --------------------------------------------------------------------------
# Planted problem samples (by sample ID; IDs are assigned in date order).
# --------------------------------------------------------------------------

MAIN_WATERED = {"M-0058": 0.10, "M-0173": 0.08, "M-0296": 0.12}  # added-water fraction
MAIN_MASTITIS = ["M-0121", "M-0240", "M-0352"]
MAIN_CLEANING = ["M-0209"]
BATCH_WATERED = {"M-0427": 0.10, "M-0451": 0.12}

# Missing-data settings.
SCATTER_RATE_MAIN = 0.03  # per cell, all features except citrate
SCATTER_RATE_BATCH = 0.02
CITRATE_MEASURED_RATE = 0.60  # citrate assay run on about 60 % of samples
NA_TEXT_SHARE = 0.70  # missing cell written as "NA"; otherwise left empty


def clip(z, limit=2.5):
    return max(-limit, min(limit, z))


def simulate_sample(rng, farm, season):
    """Draw one sample's 18 properties from the invented population model."""
    f = dict(FARMS)[farm]
    s = SEASONS[season]

    # Latent factors, standard normal clipped to +-2.5 so that ordinary
    # samples never reach the extremes reserved for the planted problems.
    z_solids = clip(rng.gauss(0.0, 1.0))  # feed / breed driven milk solids
    z_udder = clip(rng.gauss(0.0, 1.0))  # udder health of the herd on the day
    z_hyg = clip(rng.gauss(0.0, 1.0))  # milking and cooling hygiene
    z_energy = clip(rng.gauss(0.0, 1.0))  # energy balance of the herd

    v = {}
    v["fat_pct"] = 3.95 + f["fat"] + s["fat"] + 0.18 * z_solids + 0.09 * z_energy + rng.gauss(0, 0.06)
    v["protein_pct"] = 3.35 + f["prot"] + s["prot"] + 0.09 * z_solids - 0.03 * z_energy + rng.gauss(0, 0.035)

    log_scc = math.log10(f["scc"]) + 0.17 * z_udder + rng.gauss(0, 0.04)
    v["somatic_cells_k_ml"] = 10.0 ** log_scc
    d_scc = log_scc - math.log10(200.0)

    v["casein_pct"] = 0.78 * v["protein_pct"] - 0.04 * d_scc + rng.gauss(0, 0.012)
    v["lactose_pct"] = 4.78 + s["lact"] - 0.22 * d_scc + rng.gauss(0, 0.035)
    ash = 0.72 + 0.015 * z_solids + rng.gauss(0, 0.008)
    v["snf_pct"] = v["protein_pct"] + v["lactose_pct"] + ash + rng.gauss(0, 0.02)
    v["total_solids_pct"] = v["fat_pct"] + v["snf_pct"] + rng.gauss(0, 0.02)

    v["urea_mg_dl"] = 25.0 * f["urea"] * s["urea"] * math.exp(rng.gauss(0, 0.13) - 0.04 * z_energy)

    log_bact = math.log10(f["bact"]) + s["bact_log10"] + 0.22 * z_hyg + rng.gauss(0, 0.06)
    v["bacteria_k_cfu_ml"] = 10.0 ** log_bact
    d_bact = log_bact - math.log10(15.0)

    v["freezing_point_mdegc"] = -520.0 - 0.18 * (v["urea_mg_dl"] - 25.0) + rng.gauss(0, 3.0)
    v["ph"] = 6.70 + 0.05 * d_scc - 0.02 * d_bact + rng.gauss(0, 0.018)
    v["acidity_sh"] = (
        6.90
        + 1.40 * (v["protein_pct"] - 3.35)
        + 0.25 * d_bact
        - 2.0 * (v["ph"] - 6.70)
        + rng.gauss(0, 0.10)
    )
    v["density_kg_m3"] = 1000.0 + 3.75 * v["snf_pct"] - 0.65 * v["fat_pct"] + rng.gauss(0, 0.25)
    v["conductivity_ms_cm"] = 4.55 + 0.85 * d_scc + rng.gauss(0, 0.07)
    v["calcium_mg_dl"] = 120.0 + 30.0 * (v["casein_pct"] - 2.61) + rng.gauss(0, 3.0)
    v["phosphorus_mg_dl"] = 95.0 + 0.45 * (v["calcium_mg_dl"] - 120.0) + rng.gauss(0, 2.5)
    v["citrate_mg_dl"] = 168.0 - 14.0 * d_scc + 3.0 * z_energy + rng.gauss(0, 8.0)
    v["bhb_mmol_l"] = 10.0 ** (
        math.log10(0.065 * f["bhb"]) + s["bhb_log10"] + 0.16 * z_energy + rng.gauss(0, 0.07)
    )
    return v


def water(v, frac):
    """Dilute a sample with `frac` parts of added water."""
    keep = 1.0 - frac
    for name in (
        "fat_pct", "protein_pct", "casein_pct", "lactose_pct", "snf_pct",
        "total_solids_pct", "urea_mg_dl", "somatic_cells_k_ml",
        "bacteria_k_cfu_ml", "acidity_sh", "calcium_mg_dl",
        "phosphorus_mg_dl", "citrate_mg_dl", "bhb_mmol_l",
        "conductivity_ms_cm", "freezing_point_mdegc",
    ):
        v[name] *= keep
    v["density_kg_m3"] = 1000.0 + (v["density_kg_m3"] - 1000.0) * keep
    v["ph"] += 0.01


def mastitis(rng, v):
    """A clinical mastitis cow's milk went into the tank."""
    v["somatic_cells_k_ml"] = 10.0 ** rng.uniform(3.12, 3.30)  # about 1300-2000
    v["conductivity_ms_cm"] += rng.uniform(0.85, 1.10)
    drop = rng.uniform(0.28, 0.36)
    v["lactose_pct"] -= drop
    v["snf_pct"] -= drop
    v["total_solids_pct"] -= drop
    v["density_kg_m3"] -= 3.75 * drop
    v["casein_pct"] *= 0.95
    v["citrate_mg_dl"] -= rng.uniform(18.0, 25.0)
    v["ph"] += rng.uniform(0.06, 0.09)
    v["acidity_sh"] -= rng.uniform(0.30, 0.45)


def cleaning_residue(rng, v):
    """Alkaline cleaning solution left in the tank or line."""
    v["ph"] = rng.uniform(7.08, 7.14)
    v["acidity_sh"] = rng.uniform(4.8, 5.1)
    v["conductivity_ms_cm"] += rng.uniform(0.30, 0.40)
    v["bacteria_k_cfu_ml"] *= 0.3
    v["freezing_point_mdegc"] += rng.uniform(5.0, 8.0)


def fmt(name, x):
    if name in POSITIVE_FLOOR:
        x = max(x, POSITIVE_FLOOR[name])
    d = DECIMALS[name]
    text = f"{x:.{d}f}"
    if text.startswith("-") and float(text) == 0.0:
        text = text[1:]
    return text


def sample_dates(rng, start, end, n):
    """n distinct collection dates between start and end (inclusive), sorted."""
    span = (end - start).days + 1
    days = rng.sample(range(span), n)
    return sorted(start + datetime.timedelta(days=d) for d in days)


def apply_missing(rng, rows, scatter_rate, protected):
    """Blank out cells. Returns nothing; replaces values with None."""
    for row in rows:
        # citrate: only measured on part of the samples
        if rng.random() >= CITRATE_MEASURED_RATE:
            row["values"]["citrate_mg_dl"] = None
        for name in FEATURE_NAMES:
            if name == "citrate_mg_dl":
                continue
            hit = rng.random() < scatter_rate
            if hit and row["sample"] not in protected:
                row["values"][name] = None


def render(rng, rows, columns):
    lines = [",".join(columns)]
    for row in rows:
        cells = []
        for col in columns:
            if col in ("sample", "farm", "season", "collected"):
                cells.append(row[col])
                continue
            x = row["values"][col]
            if x is None:
                cells.append("NA" if rng.random() < NA_TEXT_SHARE else "")
            else:
                cells.append(fmt(col, x))
        lines.append(",".join(cells))
    return "\n".join(lines) + "\n"


def build_main(rng):
    pending = []
    for farm, _ in FARMS:
        n_summer, n_winter = MAIN_COUNTS[farm]
        for season, n in (("summer", n_summer), ("winter", n_winter)):
            start, end = WINDOWS[season]
            for day in sample_dates(rng, start, end, n):
                pending.append((day, farm, season))
    pending.sort()
    rows = []
    for i, (day, farm, season) in enumerate(pending, start=1):
        rows.append(dict(
            sample=f"M-{i:04d}",
            farm=farm,
            season=season,
            collected=day.isoformat(),
            values=simulate_sample(rng, farm, season),
        ))
    by_id = {r["sample"]: r for r in rows}
    for sid, frac in MAIN_WATERED.items():
        water(by_id[sid]["values"], frac)
    for sid in MAIN_MASTITIS:
        mastitis(rng, by_id[sid]["values"])
    for sid in MAIN_CLEANING:
        cleaning_residue(rng, by_id[sid]["values"])
    protected = set(MAIN_WATERED) | set(MAIN_MASTITIS) | set(MAIN_CLEANING)
    apply_missing(rng, rows, SCATTER_RATE_MAIN, protected)
    return rows


def build_batch(rng, first_id):
    start, end = datetime.date(2026, 4, 1), datetime.date(2026, 4, 30)
    pending = []
    for farm, params in FARMS:
        for day in sample_dates(rng, start, end, BATCH_COUNTS[farm]):
            turnout = params["turnout"]
            grazing = turnout is not None and day.day >= turnout
            pending.append((day, farm, "summer" if grazing else "winter"))
    pending.sort()
    rows = []
    for i, (day, farm, season) in enumerate(pending, start=first_id):
        rows.append(dict(
            sample=f"M-{i:04d}",
            farm=farm,
            season=season,
            collected=day.isoformat(),
            values=simulate_sample(rng, farm, season),
        ))
    by_id = {r["sample"]: r for r in rows}
    for sid, frac in BATCH_WATERED.items():
        water(by_id[sid]["values"], frac)
    apply_missing(rng, rows, SCATTER_RATE_BATCH, set(BATCH_WATERED))
    return rows


def write(path, text):
    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write(text)


def main():
    rng = random.Random(SEED)
    main_rows = build_main(rng)
    batch_rows = build_batch(rng, first_id=len(main_rows) + 1)
    main_text = render(rng, main_rows, MAIN_COLUMNS)
    batch_text = render(rng, batch_rows, BATCH_COLUMNS)
    write(os.path.join(OUT_DIR, MAIN_FILE), main_text)
    write(os.path.join(OUT_DIR, BATCH_FILE), batch_text)
    print(f"wrote {MAIN_FILE}: {len(main_rows)} samples, {len(MAIN_COLUMNS)} columns")
    print(f"wrote {BATCH_FILE}: {len(batch_rows)} samples, {len(BATCH_COLUMNS)} columns")


if __name__ == "__main__":
    main()
