#!/usr/bin/env python3
"""Write the two invented disk tables of the /kinematics page's examples.

Everything here is invented: the galaxies, their names and every number. The model is the
one the disk fit assumes (docs/methods.md §4.6 and §4.8): a thin disk in circular orbits,
v_los(x) = v_sys + sign(x) sin i sqrt(G M(<r) / r) at the projected radius r = |x| D along
the major axis, plus Gaussian measurement errors.

    python3 seed-data/kinematics/generate_disks.py            # seed 20261203, writes here
    python3 seed-data/kinematics/generate_disks.py --seed 7 --out-dir disks-check

Python 3.11, standard library only; the output is a pure function of the seed.
"""

import argparse
import importlib.util
import math
import pathlib
import random

HERE = pathlib.Path(__file__).resolve().parent

# G in pc (km/s)^2 / Msun (docs/methods.md §5).
G_PC = 4.30091727e-3
# Arcseconds per radian, 648 000 / pi.
ARCSEC_PER_RAD = 206264.806
# Kilometres per parsec (IAU 2015) and seconds per Julian year.
KM_PER_PC = 3.0856775814913673e13
S_PER_YR = 365.25 * 86400.0

# The maser disk: a point mass, seen almost edge-on, positions in milliarcseconds.
MASER = {
    "name": "Harnwick 7",
    "log_mbh": math.log10(4.0e7),
    "distance_mpc": 7.2,
    "inclination_deg": 86.0,
    "v_sys_km_s": 1420.0,
    "n_each_side": 17,
    "offset_mas": (3.8, 9.5),
    "err_km_s": (2.0, 5.0),
    "n_systemic": 5,
    "systemic_radius_mas": 3.8,
    "acc_err_km_s_yr": 0.3,
}

# The gas disk: a black hole inside a Plummer star cluster, positions in arcseconds.
GAS = {
    "name": "Tolvenna 3",
    "log_mbh": math.log10(2.0e8),
    "distance_mpc": 21.0,
    "inclination_deg": 60.0,
    "v_sys_km_s": 2310.0,
    "l_total_lsun": 1.0e9,
    "a_pc": 40.0,
    "upsilon": 2.5,
    "n_each_side": 15,
    "offset_arcsec": (0.04, 1.5),
    "err_km_s": (8.0, 18.0),
}


def load_name_rule():
    """The demo catalog's rule for invented names (seed-data/generate.py)."""
    spec = importlib.util.spec_from_file_location("generate", HERE.parent / "generate.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.name_is_allowed


def pc_per_unit(distance_mpc: float, unit_arcsec: float) -> float:
    """Parsecs per unit of angle (the unit given in arcseconds) at the distance."""
    return distance_mpc * 1.0e6 * unit_arcsec / ARCSEC_PER_RAD


def circular(mass_msun: float, r_pc: float) -> float:
    """Circular speed in km/s at r (pc) around an enclosed mass (Msun)."""
    return math.sqrt(G_PC * mass_msun / r_pc)


def maser_rows(rng: random.Random) -> list[str]:
    m = MASER
    mass = 10.0 ** m["log_mbh"]
    sin_i = math.sin(math.radians(m["inclination_deg"]))
    scale = pc_per_unit(m["distance_mpc"], 1.0e-3)
    rows = []
    lo, hi = m["offset_mas"]
    for side in (-1.0, 1.0):
        for _ in range(m["n_each_side"]):
            theta = rng.uniform(lo, hi)
            err = rng.uniform(*m["err_km_s"])
            v = m["v_sys_km_s"] + side * sin_i * circular(mass, theta * scale)
            rows.append((side * theta, v + rng.gauss(0.0, err), err, None))
    # Systemic features: on the near side of the disk at one radius, drifting at
    # a = G M / r^2 sin i along the line of sight; their velocity changes linearly across
    # the line of sight, v - v_sys = v_rot x / r.
    r_s = m["systemic_radius_mas"] * scale
    v_rot = circular(mass, r_s)
    acc = v_rot**2 / (r_s * KM_PER_PC) * S_PER_YR * sin_i
    for _ in range(m["n_systemic"]):
        theta = rng.uniform(-0.6, 0.6)
        err = rng.uniform(1.0, 2.0)
        v = m["v_sys_km_s"] + v_rot * sin_i * theta / m["systemic_radius_mas"]
        a = acc + rng.gauss(0.0, m["acc_err_km_s_yr"])
        rows.append((theta, v + rng.gauss(0.0, err), err, a))
    rows.sort(key=lambda r: r[0])
    out = ["offset_mas,v_km_s,v_err_km_s,acceleration_km_s_yr,acceleration_err_km_s_yr"]
    for theta, v, err, a in rows:
        if a is None:
            out.append(f"{theta:.3f},{v:.1f},{err:.1f},,")
        else:
            out.append(f"{theta:.3f},{v:.1f},{err:.1f},{a:.2f},{m['acc_err_km_s_yr']:.2f}")
    return out


def gas_rows(rng: random.Random) -> list[str]:
    g = GAS
    mass = 10.0 ** g["log_mbh"]
    sin_i = math.sin(math.radians(g["inclination_deg"]))
    scale = pc_per_unit(g["distance_mpc"], 1.0)
    rows = []
    lo, hi = g["offset_arcsec"]
    for side in (-1.0, 1.0):
        for _ in range(g["n_each_side"]):
            theta = math.exp(rng.uniform(math.log(lo), math.log(hi)))
            r = theta * scale
            stars = g["upsilon"] * g["l_total_lsun"] * r**3 / (r**2 + g["a_pc"] ** 2) ** 1.5
            err = rng.uniform(*g["err_km_s"])
            v = g["v_sys_km_s"] + side * sin_i * circular(mass + stars, r)
            rows.append((side * theta, v + rng.gauss(0.0, err), err))
    rows.sort(key=lambda r: r[0])
    out = ["offset_arcsec,v_km_s,v_err_km_s"]
    out.extend(f"{theta:.4f},{v:.1f},{err:.1f}" for theta, v, err in rows)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=20261203)
    parser.add_argument("--out-dir", type=pathlib.Path, default=HERE)
    args = parser.parse_args()
    allowed = load_name_rule()
    for table in (MASER, GAS):
        assert allowed(table["name"]), f"forbidden name: {table['name']}"
    rng = random.Random(args.seed)
    maser = maser_rows(rng)
    gas = gas_rows(rng)
    args.out_dir.mkdir(parents=True, exist_ok=True)
    (args.out_dir / "maser-disk.csv").write_text("\n".join(maser) + "\n", encoding="utf-8")
    (args.out_dir / "gas-disk.csv").write_text("\n".join(gas) + "\n", encoding="utf-8")
    print(f"maser-disk.csv: {len(maser) - 1} rows; gas-disk.csv: {len(gas) - 1} rows")


if __name__ == "__main__":
    main()
