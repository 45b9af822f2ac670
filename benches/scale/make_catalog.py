#!/usr/bin/env python3
"""Write an invented survey-sized catalog in massline's import CSV (standard library only).

Everything is invented: names, references and every number. The model is the demo
catalog's (seed-data/generate.py) made simple, so that only the size changes:

    log10 sigma_e ~ N(log10 170 km/s, 0.12), kept within 60-380 km/s
    log10 M_BH    = 8.30 + 5.0 log10(sigma_e / 200 km/s) + N(0, 0.40)
    log10 M_bulge = 11.0 + (log10 M_BH - 8.45) / 1.10 + N(0, 0.25)
    distance (Mpc) log-uniform in 10-300, error 8 %
    errors: sigma 5 %, log M_BH 0.10-0.30 dex, M_bulge 0.12 dex
    one mass in twenty is an upper limit at 2 sigma (0.3 dex above the drawn value)

Three rows per galaxy (sigma, bh_mass, bulge_mass). With --pending K the last K galaxies
are written to a second file, for `massline import --as USER` (submissions awaiting review).

Run:  python3 benches/scale/make_catalog.py N OUT.csv [--pending K PENDING.csv] [--seed S]
"""
import argparse
import csv
import math
import random

HEADER = [
    "galaxy", "morphology", "bulge_kind", "centre_kind", "distance_mpc", "distance_err_mpc",
    "distance_method", "quantity", "value", "scale", "limit_confidence_sigma", "method",
    "sigma_definition", "aperture", "band", "source_distance_mpc", "resolution_arcsec",
    "reference", "note", "row_key",
]
# Invented syllables: names no catalog uses.
FIELDS = ["Quellmar", "Tessavar", "Orrindel", "Vaskeny", "Poldrune", "Yarrowick"]


def rows_for(rng, i):
    name = f"{FIELDS[i % len(FIELDS)]} {i + 1:06d}"
    while True:
        log_sigma = rng.gauss(math.log10(170.0), 0.12)
        if 60.0 <= 10**log_sigma <= 380.0:
            break
    sigma = 10**log_sigma
    log_m = 8.30 + 5.0 * (log_sigma - math.log10(200.0)) + rng.gauss(0.0, 0.40)
    log_m = min(max(log_m, 4.5), 10.8)
    log_mb = 11.0 + (log_m - 8.45) / 1.10 + rng.gauss(0.0, 0.25)
    log_mb = min(max(log_mb, 7.5), 12.5)
    d = 10 ** rng.uniform(1.0, math.log10(300.0))
    morph = rng.choice(["elliptical", "lenticular", "spiral"])
    bulge = "classical" if morph == "elliptical" else rng.choice(["classical", "pseudo", "unknown"])
    common = [name, morph, bulge, "unknown", f"{d:.3g}", f"{0.08 * d:.2g}", "hubble_flow"]
    blank = [name] + [""] * (len(common) - 1)
    ref = f"Survey field {i % 97 + 1} (invented)"
    out = []
    out.append(common + ["sigma", f"{sigma:.1f} ± {0.05 * sigma:.1f}", "", "", "", "sigma_e",
                         "r_e", "", "", "", ref, "", f"s{i}-sigma"])
    if rng.random() < 0.05:
        value, conf = f"<{log_m + 0.3:.2f}", "2"
    else:
        value, conf = f"{log_m:.2f} ± {rng.uniform(0.10, 0.30):.2f}", ""
    out.append(blank + ["bh_mass", value, "log10", conf, "stellar_dynamics", "", "", "",
                        f"{d:.3g}", "0.1", ref, "", f"s{i}-mass"])
    out.append(blank + ["bulge_mass", f"{log_mb:.2f} ± 0.12", "log10", "", "photometric", "",
                        "", "", f"{d:.3g}", "", ref, "", f"s{i}-bulge"])
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", type=int, help="galaxies")
    ap.add_argument("out", help="catalog CSV (for --accept)")
    ap.add_argument("--pending", nargs=2, metavar=("K", "FILE"),
                    help="write K more galaxies to FILE, for review")
    ap.add_argument("--seed", type=int, default=20261202)
    a = ap.parse_args()
    rng = random.Random(a.seed)
    with open(a.out, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(HEADER)
        for i in range(a.n):
            w.writerows(rows_for(rng, i))
    if a.pending:
        k, path = int(a.pending[0]), a.pending[1]
        with open(path, "w", newline="", encoding="utf-8") as f:
            w = csv.writer(f)
            w.writerow(HEADER)
            for i in range(a.n, a.n + k):
                w.writerows(rows_for(rng, i))


if __name__ == "__main__":
    main()
