#!/usr/bin/env python3
"""Place every object of a CSV file against the catalog's scaling relations.

Pulls the current M_BH-sigma fit from a massline server, then sends the file's objects to
POST /api/v1/place (in batches of up to 10,000) and prints, for each object, where it falls
against M_BH-sigma (or the first relation it can use): predicted log10 M_BH with its 68 %
interval, residual (dex), z and verdict.

Standard library only. The token comes from the environment, never from the command line:

    export MASSLINE_TOKEN=ml_...              # made on /account, scope "read"
    export MASSLINE_URL=http://127.0.0.1:8080 # the default
    python3 examples/place_csv.py examples/objects.csv

The CSV needs a header; the columns it uses are the place page's fields (any may be empty):
name, sigma (km/s), mass (M_sun, or an upper limit such as <2e7), distance (Mpc),
resolution (arcsec), bulge_mass (M_sun), luminosity (L_sun) and band. Values are written as
on the place page, e.g. "210 ± 10" or "3.2e8 +0.5e8/-0.3e8".
"""

import csv
import json
import os
import sys
import urllib.error
import urllib.request

FIELDS = ("sigma", "bulge_mass", "luminosity", "band", "mass", "distance", "resolution")
BATCH = 10_000


def call(base, token, path, body=None):
    """GET (or POST JSON) an API path and return the decoded answer; exit on a problem."""
    headers = {"Accept": "application/json"}
    if token:
        headers["Authorization"] = "Bearer " + token
    data = None
    if body is not None:
        data = json.dumps(body).encode("utf-8")
        headers["Content-Type"] = "application/json"
    request = urllib.request.Request(base + path, data=data, headers=headers)
    try:
        with urllib.request.urlopen(request) as response:
            return json.load(response)
    except urllib.error.HTTPError as e:
        try:
            problem = json.load(e)
        except ValueError:
            problem = {"title": e.reason, "detail": ""}
        print(f"{path}: {e.code} {problem.get('title')}: {problem.get('detail')}", file=sys.stderr)
        for err in problem.get("errors", []):
            print(f"  {err['field']}: {err['message']}", file=sys.stderr)
        sys.exit(1)


def main():
    if len(sys.argv) != 2:
        print(__doc__.strip(), file=sys.stderr)
        sys.exit(2)
    base = os.environ.get("MASSLINE_URL", "http://127.0.0.1:8080").rstrip("/")
    token = os.environ.get("MASSLINE_TOKEN", "")

    fit = call(base, token, "/api/v1/relations/m_sigma")
    f = fit["fit"]
    if f is None:
        print(f"No M_BH-sigma fit: {fit['problem']}", file=sys.stderr)
        sys.exit(1)
    print(
        f"M_BH-sigma ({fit['estimator']}, catalog version {fit['catalog_version']}, "
        f"{fit['n_detections']} detections + {fit['n_limits']} limits): "
        f"alpha = {f['alpha_log_mbh']:.3f} ± {f['alpha_err_dex']:.3f}, "
        f"beta = {f['beta']:.2f} ± {f['beta_err']:.2f}, "
        f"scatter = {f['scatter_dex']:.3f} ± {f['scatter_err_dex']:.3f} dex"
    )

    with open(sys.argv[1], newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    names = [row.get("name") or f"row {i + 2}" for i, row in enumerate(rows)]
    objects = [{k: (row.get(k) or "").strip() for k in FIELDS if (row.get(k) or "").strip()} for row in rows]

    answers = []
    for start in range(0, len(objects), BATCH):
        answers += call(base, token, "/api/v1/place", objects[start:start + BATCH])["objects"]

    print(f"\n{'object':<16} {'relation':<14} {'predicted':>9} {'68% interval':>15} "
          f"{'residual':>9} {'z':>6}  verdict")
    for name, answer in zip(names, answers):
        placements = answer["relations"]
        chosen = next((p for p in placements if p["relation"] == "m_sigma"), None)
        chosen = chosen or (placements[0] if placements else None)
        if chosen is None or chosen["predicted_log_mbh"] is None:
            why = (chosen or {}).get("problem") or answer.get("note") or "no relation applies"
            print(f"{name:<16} {'-':<14} {why}")
            continue
        interval = f"{chosen['interval68_low_log_mbh']:.2f}-{chosen['interval68_high_log_mbh']:.2f}"
        residual = "" if chosen["residual_dex"] is None else f"{chosen['residual_dex']:+.2f}"
        z = "" if chosen["z"] is None else f"{chosen['z']:+.1f}"
        verdict = chosen["verdict"] or ""
        if chosen["prob_below_limit"] is not None:
            verdict += f" (P(below limit) = {chosen['prob_below_limit']:.0%})"
        print(f"{name:<16} {chosen['relation']:<14} {chosen['predicted_log_mbh']:>9.2f} "
              f"{interval:>15} {residual:>9} {z:>6}  {verdict}")


if __name__ == "__main__":
    main()
