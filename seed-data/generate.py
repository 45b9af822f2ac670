#!/usr/bin/env python3
"""Generate massline's invented demo catalog (Python 3.11, standard library only).

Everything written by this script is invented: the galaxies, their names, the
references and every number. It imitates the catalog an imaginary research group
might keep, so that the service has something realistic to import, fit and draw.
No real galaxy, paper or measurement is used.

Output (next to this script):
    demo-galaxies.csv       one row per galaxy
    demo-measurements.csv   one row per measurement (black-hole mass, velocity
                            dispersion, bulge mass, bulge luminosity)

Run:  python3 seed-data/generate.py [--seed 20261202]
The output is a pure function of the seed (random.Random(seed) for the first wave,
random.Random(seed + 1) for the second; no other source of randomness, no clock, no
hash ordering).

Two waves: the first (`build`, the model just below) makes 96 galaxies and their rows;
the second (`add_agn`, "Second wave" further down) draws from its own generator after
the first is complete, so the first wave's values, names and planted features are the
same with or without it. The second wave appends the galaxy column `activity` and the
ten virial measurement columns, and adds 36 active nuclei.

Model (all relations are invented for the demo; they are not published fits)
---------------------------------------------------------------------------
Sample: 96 galaxies in roles with fixed counts
    stellar-dynamics detections 50 (26 E, 14 S0, 10 S)
    gas-dynamics detections     18 (6 E, 5 S0, 7 S)
    gas-dynamics upper limits   10 (9 S, 1 S0)
    stellar-dynamics limits      2 (1 E, 1 S0)
    masers                       9 (6 S, 3 S0)
    reverberation mapping        7 (4 S, 3 S0)
Velocity dispersion sigma_e (km/s): log10 sigma_e ~ N(mu, s) by role and morphology,
redrawn until 60 <= sigma_e <= 350:
    ellipticals mu = log10 240, s = 0.11; lenticulars mu = log10 178, s = 0.11;
    spirals mu = log10 126, s = 0.12; masers mu = log10 126, s = 0.08;
    reverberation mu = log10 126, s = 0.10; upper-limit hosts mu = log10 89, s = 0.08.
Bulge kind: ellipticals classical; lenticulars classical/pseudo/unknown with
    probabilities 0.70/0.20/0.10; spirals 0.40/0.45/0.15.
Centre kind (cores only in classical bulges): ellipticals with sigma_e >= 230 km/s
    core/power_law/unknown 0.80/0.15/0.05, other ellipticals 0.15/0.75/0.10;
    classical lenticulars 0.05/0.60/0.35; other lenticulars and all spirals have no
    core (power_law/unknown 0.50/0.50 for lenticulars, 0.35/0.65 for spirals).
Black-hole mass (demo M-sigma relation, invented):
    log10 M_BH = 8.30 + 5.0 log10(sigma_e / 200 km/s) + offset + N(0, scatter)
    offset = -0.30 dex and scatter = 0.45 dex for pseudo bulges,
    offset = +0.15 dex for cores, otherwise offset = 0 and scatter = 0.35 dex;
    "unknown" bulges are drawn as classical. Redrawn until 4.0 <= log M_BH <= 10.9.
Planted outliers: 4 classical-bulge dynamical detections with 100 <= sigma_e <= 260
    get log M_BH = relation + offset +/- U(1.2, 1.6) dex (3 above, 1 below, no scatter;
    the one below is drawn among sigma_e >= 180 km/s so it stays resolvable).
Bulge mass (demo M_BH-M_bulge relation, slope 1.10, zero point 8.45 at 1e11 M_sun):
    log10 M_bulge = 11.0 + (log10 M_BH - 8.45) / 1.10 + N(0, 0.25),
    redrawn until 7.0 <= log10 M_bulge <= 12.6
    (for planted outliers the M_BH before the outlier shift is used, so they are
    outliers in both relations).
Bulge luminosity in band V or K (L_sun of that band):
    log10 L = log10 M_bulge - log10(M/L), log10(M/L_V) = 0.80 + N(0, 0.10),
    log10(M/L_K) = -0.10 + N(0, 0.10), both +0.05 for ellipticals; M/L redrawn
    until 6.5 <= log10 L <= 12.9.
Distances (Mpc), log-uniform:
    dynamical detections: [max(2, D_hi/5), D_hi] with D_hi = min(120, distance at
        which the sphere of influence of the true mass subtends 0.09 arcsec);
        2-3 Mpc if D_hi < 2.5
    upper limits 3-25; masers 6-120; reverberation 15-120. Rounded to 3 significant
    digits; the adopted distance is taken as exact when values are drawn.
    Method: D < 20 Mpc spirals cepheid/trgb/tully_fisher 0.45/0.30/0.25, others
    sbf/trgb 0.60/0.40; 20-45 Mpc spirals tully_fisher/cepheid 0.60/0.40, others
    sbf/hubble_flow 0.85/0.15; beyond, spirals tully_fisher/hubble_flow 0.50/0.50,
    others hubble_flow/sbf 0.80/0.20; then 4 of the 9 maser hosts get "maser".
    Fractional error by method: cepheid U(0.055, 0.08), trgb U(0.055, 0.07),
    sbf U(0.06, 0.10), maser U(0.055, 0.08), tully_fisher U(0.12, 0.145),
    hubble_flow U(0.08, 0.145), 2 significant digits, always within 5-15 %.
Measurement errors (observed = true + Gaussian draw with the quoted error):
    log M_BH: stellar dynamics U(0.08, 0.30) dex, gas dynamics U(0.05, 0.25),
        masers U(0.02, 0.04), reverberation U(0.30, 0.40);
    sigma: fractional f = U(0.03, 0.08), observed = true x (1 + N(0, f)), quoted
        error f x observed, both rounded to km/s; bulge mass U(0.10, 0.20) dex;
    bulge luminosity U(0.05, 0.10) dex.
Upper limits: quoted limit = true mass x U(1.5, 3), no error.
sigma_c: 6 early-type galaxies (not planted outliers) quote a central dispersion
    within r_e/8 instead of sigma_e;
    its true value is sigma_e x 8^0.066 (aperture scaling sigma_R/sigma_e =
    (R/R_e)^-0.066, Cappellari et al. 2006, MNRAS 366, 1126; exponent from memory).
Coverage: all galaxies have sigma; 82 (85 %) a bulge mass (dynamical with p = 0.6 for
    ellipticals and 0.3 otherwise, else photometric);
    34 (35 %) a bulge luminosity (V or K, half each).
Superseded measurements: 6 galaxies with a resolved dynamical detection also have an
    older, seeing-limited (0.5-0.8 arcsec) black-hole mass, biased high by
    U(0.15, 0.45) dex with N(0, 0.10) noise and errors U(0.20, 0.30) dex; adopted = 0;
    method as the adopted row (p = 0.7) or stellar dynamics.
Source distances: 15 % of the rows that carry a source distance quote an older
    distance differing from the adopted one by 6-25 % (either sign). The value is
    written at the source distance: dynamical masses scale as D, luminosities and
    photometric bulge masses as D^2, reverberation masses not at all.
Resolution: masers 0.001 arcsec, reverberation none; dynamical rows HST-like
    0.08-0.12, adaptive optics 0.04-0.10 or seeing-limited 0.5-0.8 arcsec, chosen so
    that theta_infl / resolution >= 1.25 for detections (upper limits keep the
    instrument's value); a detection too small for any of these gets 0.03 arcsec
    and stays unresolved. Planted: 6 adopted dynamical detections (not outliers)
    with 0.04 <= theta_infl <= 0.45 arcsec get a resolution 1.3-2.5 times theta_infl,
    rounded to 0.01 arcsec and kept below 0.8 of it (unresolved).
    theta_infl[arcsec] = 206264.806 * (G M / sigma^2)[pc] / D[pc],
    G = 4.30091727e-3 pc M_sun^-1 (km/s)^2, from the observed mass and the sigma
    as written (sigma_e or sigma_c) at the adopted distance.
Typed values: 2-3 significant digits, in the forms "2.4e8 +0.6e8/-0.5e8",
    "3.1x10^8 ± 0.4x10^8", "2.4e8 ± 0.6e8", "2.4e8 ± 0.12 dex", "8.52 ± 0.08" with
    scale log10, "<3.2e7" / "<3.2x10^7" (limits), "212 ± 11" (sigma); "+/-" instead
    of "±" in about 10 % of them. Linear symmetric errors are used only when the
    error is at most 0.30 dex, so the lower error always stays below the value.
Notes: "planted outlier", "planted: sphere of influence not resolved",
    "sphere of influence not resolved" (natural), "superseded by <ref>;
    seeing-limited", "source used an older distance".

Second wave (random.Random(seed + 1); all invented)
---------------------------------------------------
Activity of the first wave (fixed counts): the 7 reverberation hosts seyfert1; 4 of the
    9 maser hosts seyfert2; of the other spirals and lenticulars 5 seyfert2 and 6 liner;
    3 core ellipticals radio_galaxy; 4 of the rest unknown; the rest quiescent. Their
    7 reverberation masses stay typed, with no virial factor recorded (shown as published,
    never rescaled).
Reverberation AGN: 26 Seyfert 1 (15 S, 9 S0, 2 E); bulge kind S 0.45/0.45/0.10, S0
    0.60/0.30/0.10 classical/pseudo/unknown, E classical; centre kind by the first wave's
    rules.
    true log sigma_e ~ N(log10 120, 0.10), redrawn until 60 <= sigma_e <= 350;
    true log M = 8.30 + 5.0 log10(sigma_e / 200) + offset + N(0, eps), the demo M-sigma
        relation with the first wave's offsets and scatters, redrawn until 4.0..10.9;
    log f_i = 0.70 + N(0, 0.20) (demo truth log <f> = 0.70, not the service's 0.64);
    true log VP = log M - log f_i;
    log lambda L(5100) ~ U(42.6, 44.6) erg/s, written with N(0, 0.03) noise, 2 decimals;
    true lag: log tau[d] = 1.527 + 0.533 log10(L / 1e44) + N(0, 0.13) (Bentz et al. 2013
        R-L relation; tau in days = R in light-days);
    true sigma_line (rms spectrum) from VP = c tau sigma_line^2 / G with
        c = 299792.458 km/s, GM_sun = 1.3271244e20 m^3/s^2, 1 day = 86400 s;
    observed lag = true x (1 + N(0, e_tau)), e_tau ~ U(0.08, 0.20), redrawn if below 0.3 x
        true, 3 significant digits; error e_tau x lag (2 significant digits), for 10 of
        them asymmetric "+a/-b" with a = U(1.0, 1.4) and b = U(0.7, 1.0) times that;
    observed width = true x (1 + N(0, e_w)), e_w ~ U(0.04, 0.08), rounded to km/s,
        error e_w x width;
    value EMPTY (the service computes the virial product), line Hbeta, width_definition
        sigma_line, width_spectrum rms; 4 of them instead typed as published masses
        5.5 x VP_obs (virial_factor 5.5) with the propagated error (at least 0.05 dex),
        the lag and width kept;
    sigma_e observed as in the first wave; distance log-uniform 15-150 Mpc, hubble_flow
        with p = 0.75, else tully_fisher (spirals) or sbf; 12 of them a bulge mass from
        the first wave's M_BH-M_bulge relation at the true mass (dynamical p = 0.3);
        resolution empty; source distance = adopted distance.
Single-epoch AGN: 10; log lambda L(5100) ~ U(43.0, 45.3) (2 decimals), FWHM(Hbeta) ~
    U(1500, 6000) km/s (to 10 km/s), error U(0.05, 0.10) of it; the 3 most luminous
    quasar, the rest seyfert1; hosts: quasars E/S0/S 0.6/0.2/0.2, Seyferts S/S0/E
    0.6/0.3/0.1, bulge classical for E, else unknown/classical 0.6/0.4; centre unknown;
    distance log-uniform 60-400 Mpc, hubble_flow; value EMPTY, width_definition fwhm,
    width_spectrum single; 7 calibration vp06, 3 r_l_bentz13; source distance = adopted;
    5 with an observed sigma_e, whose true value puts the host on the demo M-sigma relation
    at the vp06 mass of its spectrum, N(0, 0.07) dex in sigma.
    vp06: log M = 6.91 + 2 log10(FWHM / 1000 km/s) + 0.50 log10(L / 1e44);
    r_l_bentz13: log VP = log10(c tau FWHM^2 / G), tau from the Bentz relation.
References: invented surnames, ending in "(demo)"; sigma and bulge masses from the first
    wave's pools.
"""

from __future__ import annotations

import argparse
import csv
import math
import random
import re
import sys
from collections import Counter
from pathlib import Path

DEFAULT_SEED = 20261202

G_PC = 4.30091727e-3  # pc M_sun^-1 (km/s)^2
ARCSEC_PER_RAD = 206264.806

# Demo relations (invented for this data set).
MSIGMA_ZERO = 8.30
MSIGMA_SLOPE = 5.0
MSIGMA_PIVOT_KM_S = 200.0
SCATTER_CLASSICAL = 0.35
SCATTER_PSEUDO = 0.45
OFFSET_PSEUDO = -0.30
OFFSET_CORE = 0.15
MBULGE_ZERO = 8.45
MBULGE_SLOPE = 1.10
MBULGE_SCATTER = 0.25
ML_V, ML_K, ML_SCATTER, ML_E_EXTRA = 0.80, -0.10, 0.10, 0.05
SIGMA_C_FACTOR = 8.0**0.066  # sigma(r_e/8) / sigma_e

GALAXY_HEADER = [
    "name", "morphology", "bulge_kind", "centre_kind",
    "distance_mpc", "distance_err_mpc", "distance_method",
    "activity",  # second wave
]
MEASUREMENT_HEADER = [
    "galaxy", "quantity", "value", "scale", "method", "sigma_definition", "aperture",
    "band", "source_distance_mpc", "resolution_arcsec", "reference", "adopted", "note",
    # second wave: the virial cells (server/catalog/virial.rs, VIRIAL_COLUMNS)
    "line", "width_definition", "width_spectrum", "lag_days", "lag_err_days", "width_km_s",
    "width_err_km_s", "log_l5100_erg_s", "virial_factor", "calibration",
]
N_FIRST_GALAXY_COLUMNS = 7
N_FIRST_MEASUREMENT_COLUMNS = 13

# Invented name stems (two syllables, no catalog prefix, no real galaxy's name).
STEMS_ASCII = [
    "Corvane", "Tilsen", "Brannoch", "Halvere", "Osmarek", "Quillon", "Derrow",
    "Fenmoor", "Ystrel", "Paldrin", "Torvel", "Lisbane", "Kestrin", "Morvath",
    "Elvasse", "Grennock", "Suthra", "Nalveth", "Rhodal", "Jorvane", "Thessen",
    "Orwen", "Vantrel", "Pellow", "Drummel", "Hollin", "Zarvel", "Ostrine",
    "Tamsel", "Quorra", "Brisland", "Mirrow", "Fallan", "Skerrit", "Wendrow", "Gavrel",
]
STEMS_ACCENT = ["Vélaro", "Sérrin"]

# Catalog prefixes and well-known names a demo name must not start with or contain.
FORBIDDEN_PREFIXES = [
    "NGC", "IC", "UGC", "UGCA", "PGC", "Mrk", "Mkn", "Markarian", "Arp", "ESO", "Abell",
    "CGCG", "MCG", "SDSS", "2MASS", "Sgr", "Cen", "Cyg", "Vir", "Fornax", "Leo",
    "Messier", "DDO", "VCC", "FCC", "HCG", "LEDA", "IRAS", "Holmberg", "Haro", "Zw",
    "KK", "PKS", "3C", "4C", "AM", "LMC", "SMC", "Draco", "Sculptor", "Carina",
    "Sextans", "Hydra", "Perseus", "Coma", "Virgo", "Andromeda", "Triangulum",
    "Centaurus", "Pegasus", "Phoenix", "Tucana", "Ursa", "Bootes", "Hercules",
    "Antlia", "Aquarius", "Cetus", "Pisces", "Sagittarius", "Hoag", "Malin", "Maffei",
    "Dwingeloo", "Sombrero", "Whirlpool", "Pinwheel", "Cartwheel", "Sunflower",
    "Cigar", "Antennae", "Tadpole", "Circinus", "Milky", "Magellan", "Bode",
    "Black Eye", "Mice", "Needle", "Cocoon", "Medusa", "Condor", "Fireworks",
]
UPPERCASE_CODES = [p for p in FORBIDDEN_PREFIXES if p.isupper() and len(p) >= 2]

# Invented author surnames for the invented references.
AUTHORS = [
    "Halvard", "Brennick", "Ostrowe", "Tamsley", "Quarrin", "Velloway", "Dunmere",
    "Kellerby", "Pendrell", "Solvane", "Irskine", "Maudrel", "Wyncoll", "Esterhal",
    "Liddane", "Corbray", "Nesbrook", "Farrowell", "Sévrin", "Trevallis", "Oakenby",
    "Haddrel",
]

NUM = r"(\d+(?:\.\d+)?)(?:e([+-]?\d+)|x10\^([+-]?\d+))?"


# ----------------------------------------------------------------------------
# Small helpers
# ----------------------------------------------------------------------------

def round_sig(x: float, sig: int) -> float:
    """Round x (> 0) to `sig` significant digits."""
    return round(x, sig - 1 - math.floor(math.log10(abs(x))))


def fmt_sig(x: float, sig: int) -> str:
    """Format x (> 0) with `sig` significant digits in plain decimal notation."""
    r = round_sig(x, sig)
    decimals = max(0, sig - 1 - math.floor(math.log10(r)))
    return f"{r:.{decimals}f}"


def theta_infl_arcsec(log_m: float, sigma_km_s: float, distance_mpc: float) -> float:
    """Angle subtended by r_infl = G M / sigma^2 at distance D."""
    r_pc = G_PC * 10.0**log_m / sigma_km_s**2
    return ARCSEC_PER_RAD * r_pc / (distance_mpc * 1.0e6)


def normal_truncated(rng: random.Random, mu: float, s: float, lo: float, hi: float) -> float:
    """Draw N(mu, s) until it lands in [lo, hi]."""
    while True:
        x = rng.gauss(mu, s)
        if lo <= x <= hi:
            return x


def log_uniform(rng: random.Random, lo: float, hi: float) -> float:
    return 10.0 ** rng.uniform(math.log10(lo), math.log10(hi))


def pick(rng: random.Random, weighted: list[tuple[str, float]]) -> str:
    names = [n for n, _ in weighted]
    weights = [w for _, w in weighted]
    return rng.choices(names, weights=weights, k=1)[0]


def name_key(name: str) -> tuple[str, int]:
    """Sort key: stem alphabetically, then the number numerically."""
    stem, number = name.rsplit(" ", 1)
    return stem, int(number)


def name_is_allowed(name: str) -> bool:
    """True when a name starts with / contains no catalog prefix or known name."""
    low = name.lower()
    for p in FORBIDDEN_PREFIXES:
        if low.startswith(p.lower()):
            return False
        if re.search(r"(?<![a-z])" + re.escape(p.lower()) + r"(?![a-z])", low):
            return False
    if any(code in name for code in UPPERCASE_CODES):
        return False
    if re.search(r"\bM\s?\d", name):
        return False
    return True


# ----------------------------------------------------------------------------
# Value formatting (what a person types) and a parser to check it
# ----------------------------------------------------------------------------

def mantissa_exponent(a: float) -> tuple[float, int, int]:
    """Split a > 0 into a rounded mantissa (2-3 significant digits), exponent, decimals."""
    n = math.floor(math.log10(a))
    m = a / 10.0**n
    decimals = 2 if m < 3.0 else 1
    m = round(m, decimals)
    if m >= 10.0:
        m, n = m / 10.0, n + 1
        decimals = 2
        m = round(m, decimals)
    return m, n, decimals


def fmt_err_mantissa(b: float, n: int, decimals: int) -> str:
    """Format b / 10^n with at least `decimals` decimals and a non-zero result."""
    x = b / 10.0**n
    d = decimals
    while round(x, d) == 0.0 and d < 4:
        d += 1
    return f"{round(x, d):.{d}f}"


def pm(rng: random.Random) -> str:
    """The plus-minus sign as typed: mostly U+00B1, sometimes '+/-'."""
    return "+/-" if rng.random() < 0.10 else "±"


def format_log_value(
    rng: random.Random, log_v: float, err_dex: float, form: str
) -> tuple[str, str]:
    """Return (value text, scale) for a detection of log10 value log_v."""
    if form == "log":
        err = max(0.01, round(err_dex, 2))
        return f"{log_v:.2f} {pm(rng)} {err:.2f}", "log10"
    a = 10.0**log_v
    m, n, dec = mantissa_exponent(a)
    a_txt = f"{m:.{dec}f}"
    scale = rng.choice(["", "linear"])
    if form == "dex":
        err = max(0.01, round(err_dex, 2))
        return f"{a_txt}e{n} {pm(rng)} {err:.2f} dex", scale
    a_round = m * 10.0**n
    if form == "asym":
        up = a_round * (10.0**err_dex - 1.0)
        lo = a_round * (1.0 - 10.0**-err_dex)
        up_txt, lo_txt = fmt_err_mantissa(up, n, dec), fmt_err_mantissa(lo, n, dec)
        return f"{a_txt}e{n} +{up_txt}e{n}/-{lo_txt}e{n}", scale
    sym = a_round * (10.0**err_dex - 10.0**-err_dex) / 2.0
    if form == "sym_e":
        return f"{a_txt}e{n} {pm(rng)} {fmt_err_mantissa(sym, n, dec)}e{n}", scale
    if form == "sym_x":
        return f"{a_txt}x10^{n} {pm(rng)} {fmt_err_mantissa(sym, n, dec)}x10^{n}", scale
    raise ValueError(form)


def format_limit(rng: random.Random, log_v: float) -> str:
    a = 10.0**log_v
    n = math.floor(math.log10(a))
    m = round(a / 10.0**n, 1)
    if m >= 10.0:
        m, n = 1.0, n + 1
    if rng.random() < 0.6:
        return f"<{m:.1f}e{n}"
    return f"<{m:.1f}x10^{n}"


def _num(groups: tuple[str | None, ...]) -> float:
    mant, e1, e2 = groups
    exp = e1 if e1 is not None else e2
    return float(mant) * (10.0 ** int(exp) if exp is not None else 1.0)


def parse_value(text: str, scale: str) -> dict:
    """Parse the typed forms used here into log10 value and dex errors (self-check)."""
    t = text.strip().replace("+/-", "±")
    m = re.fullmatch(r"<\s*" + NUM, t)
    if m:
        v = _num(m.groups())
        log_v = v if scale == "log10" else math.log10(v)
        return {"limit": True, "log": log_v, "minus": None, "plus": None}
    m = re.fullmatch(NUM + r" ± (\d+(?:\.\d+)?) dex", t)
    if m:
        v = _num(m.groups()[:3])
        e = float(m.group(4))
        return {"limit": False, "log": math.log10(v), "minus": e, "plus": e}
    m = re.fullmatch(NUM + r" ± " + NUM, t)
    if m:
        v, b = _num(m.groups()[:3]), _num(m.groups()[3:])
        if scale == "log10":
            return {"limit": False, "log": v, "minus": b, "plus": b}
        if not b < v:
            raise ValueError(f"lower error not below value: {text}")
        return {"limit": False, "log": math.log10(v),
                "minus": math.log10(v / (v - b)), "plus": math.log10((v + b) / v)}
    m = re.fullmatch(NUM + r" \+" + NUM + r"/-" + NUM, t)
    if m:
        g = m.groups()
        v, up, lo = _num(g[:3]), _num(g[3:6]), _num(g[6:])
        if scale == "log10":
            return {"limit": False, "log": v, "minus": lo, "plus": up}
        if not lo < v:
            raise ValueError(f"lower error not below value: {text}")
        return {"limit": False, "log": math.log10(v),
                "minus": math.log10(v / (v - lo)), "plus": math.log10((v + up) / v)}
    raise ValueError(f"unparsed value: {text!r}")


# ----------------------------------------------------------------------------
# The catalog
# ----------------------------------------------------------------------------

ROLES = (
    [("stellar", "elliptical")] * 26 + [("stellar", "lenticular")] * 14
    + [("stellar", "spiral")] * 10
    + [("gas", "elliptical")] * 6 + [("gas", "lenticular")] * 5 + [("gas", "spiral")] * 7
    + [("gas_limit", "spiral")] * 9 + [("gas_limit", "lenticular")] * 1
    + [("stellar_limit", "elliptical")] * 1 + [("stellar_limit", "lenticular")] * 1
    + [("maser", "spiral")] * 6 + [("maser", "lenticular")] * 3
    + [("reverberation", "spiral")] * 4 + [("reverberation", "lenticular")] * 3
)
N_BULGE_MASS = 82
N_LUMINOSITY = 34
N_SIGMA_C = 6
N_OUTLIERS = 4
N_UNRESOLVED = 6
N_SUPERSEDED = 6
MISMATCH_FRACTION = 0.15

SIGMA_PRIOR = {  # (mean log10 sigma_e, sd) by role or morphology
    "elliptical": (math.log10(240.0), 0.11),
    "lenticular": (math.log10(178.0), 0.11),
    "spiral": (math.log10(126.0), 0.12),
    "maser": (math.log10(126.0), 0.08),
    "reverberation": (math.log10(126.0), 0.10),
    "limit": (math.log10(89.0), 0.08),
}
BH_METHOD = {
    "stellar": "stellar_dynamics", "stellar_limit": "stellar_dynamics",
    "gas": "gas_dynamics", "gas_limit": "gas_dynamics",
    "maser": "maser", "reverberation": "reverberation",
}
BH_ERR_RANGE = {
    "stellar_dynamics": (0.08, 0.30), "gas_dynamics": (0.05, 0.25),
    "maser": (0.02, 0.04), "reverberation": (0.30, 0.40),
}
DIST_ERR_RANGE = {
    "cepheid": (0.055, 0.08), "trgb": (0.055, 0.07), "sbf": (0.06, 0.10),
    "maser": (0.055, 0.08), "tully_fisher": (0.12, 0.145), "hubble_flow": (0.08, 0.145),
}
DYNAMICAL = ("stellar_dynamics", "gas_dynamics")


def make_references(rng: random.Random) -> dict[str, list[str]]:
    """Invented references, grouped by the kind of paper that would report them."""
    authors = AUTHORS[:]
    rng.shuffle(authors)

    def ref(author: str, year: int) -> str:
        style = rng.random()
        if style < 0.7:
            return f"{author} et al. {year} (demo)"
        if style < 0.9:
            other = rng.choice([a for a in AUTHORS if a != author])
            return f"{author} & {other} {year} (demo)"
        return f"{author} {year} (demo)"

    pools = {
        "dynamics": [ref(a, rng.randint(2009, 2025)) for a in authors[:10]],
        "maser": [ref(a, rng.randint(2008, 2024)) for a in authors[10:13]],
        "reverberation": [ref(a, rng.randint(2010, 2025)) for a in authors[13:15]],
        "sigma": [ref(a, rng.randint(2006, 2022)) for a in authors[15:18]],
        "bulge": [ref(a, rng.randint(2011, 2025)) for a in authors[18:20]],
        "luminosity": [ref(a, rng.randint(2007, 2023)) for a in authors[20:22]],
        "old": [ref(a, rng.randint(1996, 2007)) for a in authors[0:6]],
    }
    for refs in pools.values():
        assert len(set(refs)) == len(refs)
    return pools


def make_names(rng: random.Random, n: int) -> list[str]:
    """Unique invented names: a stem plus a number; the accented stems once each."""
    names = [f"{stem} {rng.randint(2, 60)}" for stem in STEMS_ACCENT]
    stems = STEMS_ASCII[:]
    used = set(names)
    while len(names) < n:
        stem = rng.choice(stems)
        name = f"{stem} {rng.randint(1, 399)}"
        if name in used or sum(x.startswith(stem + " ") for x in names) >= 3:
            continue
        used.add(name)
        names.append(name)
    rng.shuffle(names)
    return names


def choose_distance_method(rng: random.Random, d: float, morph: str) -> str:
    if d < 20.0:
        if morph == "spiral":
            return pick(rng, [("cepheid", 0.45), ("trgb", 0.30), ("tully_fisher", 0.25)])
        return pick(rng, [("sbf", 0.6), ("trgb", 0.4)])
    if d < 45.0:
        if morph == "spiral":
            return pick(rng, [("tully_fisher", 0.6), ("cepheid", 0.4)])
        return pick(rng, [("sbf", 0.85), ("hubble_flow", 0.15)])
    if morph == "spiral":
        return pick(rng, [("tully_fisher", 0.5), ("hubble_flow", 0.5)])
    return pick(rng, [("hubble_flow", 0.8), ("sbf", 0.2)])


def build(seed: int) -> tuple[list[dict], list[dict], dict]:
    rng = random.Random(seed)
    refs = make_references(rng)
    names = make_names(rng, len(ROLES))
    roles = ROLES[:]
    rng.shuffle(roles)

    galaxies: list[dict] = []
    for name, (role, morph) in zip(names, roles):
        g: dict = {"name": name, "role": role, "morphology": morph}
        # Velocity dispersion (true sigma_e, km/s)
        if role in ("gas_limit", "stellar_limit"):
            mu, s = SIGMA_PRIOR["limit"]
        elif role in ("maser", "reverberation"):
            mu, s = SIGMA_PRIOR[role]
        else:
            mu, s = SIGMA_PRIOR[morph]
        g["sigma_true"] = 10.0 ** normal_truncated(rng, mu, s, math.log10(60.0), math.log10(350.0))
        # Bulge kind
        if morph == "elliptical":
            g["bulge_kind"] = "classical"
        elif morph == "lenticular":
            g["bulge_kind"] = pick(rng, [("classical", 0.70), ("pseudo", 0.20), ("unknown", 0.10)])
        else:
            g["bulge_kind"] = pick(rng, [("classical", 0.40), ("pseudo", 0.45), ("unknown", 0.15)])
        # Centre kind
        if morph == "elliptical" and g["sigma_true"] >= 230.0:
            g["centre_kind"] = pick(rng, [("core", 0.80), ("power_law", 0.15), ("unknown", 0.05)])
        elif morph == "elliptical":
            g["centre_kind"] = pick(rng, [("core", 0.15), ("power_law", 0.75), ("unknown", 0.10)])
        elif morph == "lenticular" and g["bulge_kind"] == "classical":
            g["centre_kind"] = pick(rng, [("core", 0.05), ("power_law", 0.60), ("unknown", 0.35)])
        elif morph == "lenticular":
            g["centre_kind"] = pick(rng, [("power_law", 0.50), ("unknown", 0.50)])
        else:
            g["centre_kind"] = pick(rng, [("power_law", 0.35), ("unknown", 0.65)])
        g["outlier"] = 0.0
        galaxies.append(g)

    # Planted outliers: classical dynamical detections of intermediate sigma.
    candidates = [g for g in galaxies if g["role"] in ("stellar", "gas")
                  and g["bulge_kind"] == "classical" and 100.0 <= g["sigma_true"] <= 260.0]
    # The one under-massive outlier gets a high sigma so that its sphere of
    # influence stays resolvable: each planted feature should stand alone.
    low = rng.choice([g for g in candidates if g["sigma_true"] >= 180.0])
    low["outlier"] = -rng.uniform(1.2, 1.6)
    for g in rng.sample([g for g in candidates if g is not low], N_OUTLIERS - 1):
        g["outlier"] = rng.uniform(1.2, 1.6)

    for g in galaxies:
        pseudo = g["bulge_kind"] == "pseudo"
        offset = OFFSET_PSEUDO if pseudo else 0.0
        if g["centre_kind"] == "core":
            offset += OFFSET_CORE
        scatter = SCATTER_PSEUDO if pseudo else SCATTER_CLASSICAL
        x = math.log10(g["sigma_true"] / MSIGMA_PIVOT_KM_S)
        mean = MSIGMA_ZERO + MSIGMA_SLOPE * x + offset
        g["logm_relation"] = mean
        if g["outlier"]:
            g["logm_true"] = mean + g["outlier"]
            base = normal_truncated(rng, mean, scatter, 4.0, 10.9)
        else:
            g["logm_true"] = normal_truncated(rng, mean, scatter, 4.0, 10.9)
            base = g["logm_true"]
        # Redraws keep the typed values (after noise and distance changes) inside
        # the service's accepted range of 6..13.5 in log.
        mean_bulge = 11.0 + (base - MBULGE_ZERO) / MBULGE_SLOPE
        g["logmbulge_true"] = normal_truncated(rng, mean_bulge, MBULGE_SCATTER, 7.0, 12.6)
        extra = ML_E_EXTRA if g["morphology"] == "elliptical" else 0.0
        g["band"] = rng.choice(["V", "K"])
        ml_mean = (ML_V if g["band"] == "V" else ML_K) + extra
        while True:
            ml = rng.gauss(ml_mean, ML_SCATTER)
            if 6.5 <= g["logmbulge_true"] - ml <= 12.9:
                break
        g["loglum_true"] = g["logmbulge_true"] - ml

    # Distances
    for g in galaxies:
        role = g["role"]
        if role in ("stellar", "gas"):
            theta10 = theta_infl_arcsec(g["logm_true"], g["sigma_true"], 10.0)
            d_hi = min(120.0, 10.0 * theta10 / 0.09)
            if d_hi < 2.5:
                d = rng.uniform(2.0, 3.0)
            else:
                d = log_uniform(rng, max(2.0, d_hi / 5.0), d_hi)
        elif role in ("gas_limit", "stellar_limit"):
            d = log_uniform(rng, 3.0, 25.0)
        elif role == "maser":
            d = log_uniform(rng, 6.0, 120.0)
        else:
            d = log_uniform(rng, 15.0, 120.0)
        g["distance_mpc"] = float(fmt_sig(d, 3))
        g["distance_method"] = choose_distance_method(rng, d, g["morphology"])
    # Four of the maser hosts have a geometric maser distance.
    for g in rng.sample([g for g in galaxies if g["role"] == "maser"], 4):
        g["distance_method"] = "maser"
    for g in galaxies:
        lo, hi = DIST_ERR_RANGE[g["distance_method"]]
        while True:  # two significant digits must keep the error within 5-15 %
            err = float(fmt_sig(g["distance_mpc"] * rng.uniform(lo, hi), 2))
            if 0.05 <= err / g["distance_mpc"] <= 0.15:
                break
        g["distance_err_mpc"] = err

    # Which galaxies carry which optional quantity
    order = galaxies[:]
    rng.shuffle(order)
    for i, g in enumerate(order):
        g["has_bulge_mass"] = i < N_BULGE_MASS
    rng.shuffle(order)
    for i, g in enumerate(order):
        g["has_luminosity"] = i < N_LUMINOSITY
    # sigma_c goes to early types that are not planted outliers, so that each
    # planted feature can be studied on its own.
    sigc_pool = [g for g in galaxies if g["morphology"] != "spiral" and not g["outlier"]]
    for g in galaxies:
        g["sigma_def"] = "sigma_e"
    for g in rng.sample(sigc_pool, N_SIGMA_C):
        g["sigma_def"] = "sigma_c"

    rows: list[dict] = []
    for g in galaxies:
        # sigma row (written sigma is used for the sphere-of-influence check)
        frac = rng.uniform(0.03, 0.08)
        true_sig = g["sigma_true"] * (SIGMA_C_FACTOR if g["sigma_def"] == "sigma_c" else 1.0)
        obs = true_sig * (1.0 + rng.gauss(0.0, frac))
        g["sigma_written"] = float(round(obs))
        rows.append({
            "galaxy": g["name"], "quantity": "sigma", "kind": "sigma",
            "sigma_value": round(obs), "sigma_err": max(1, round(obs * frac)),
            "scale": rng.choice(["", "", "", "linear"]), "method": "",
            "sigma_definition": g["sigma_def"],
            "aperture": "r_e/8" if g["sigma_def"] == "sigma_c" else "r_e",
            "band": "", "k": 0, "reference": rng.choice(refs["sigma"]),
            "adopted": 1, "notes": [],
        })
        # black-hole mass row
        method = BH_METHOD[g["role"]]
        limit = g["role"].endswith("_limit")
        if limit:
            err = None
            log_obs = g["logm_true"] + math.log10(rng.uniform(1.5, 3.0))
        else:
            err = rng.uniform(*BH_ERR_RANGE[method])
            log_obs = g["logm_true"] + rng.gauss(0.0, err)
        pool = {"maser": "maser", "reverberation": "reverberation"}.get(method, "dynamics")
        bh = {
            "galaxy": g["name"], "quantity": "bh_mass", "kind": "bh", "log_obs": log_obs,
            "err": err, "limit": limit, "method": method, "band": "",
            "k": 0 if method == "reverberation" else 1,
            "reference": rng.choice(refs[pool]), "adopted": 1, "notes": [],
        }
        if g["outlier"]:
            bh["notes"].append("planted outlier")
        g["bh_row"] = bh
        rows.append(bh)
        if g["has_bulge_mass"]:
            dyn = rng.random() < (0.6 if g["morphology"] == "elliptical" else 0.3)
            err = rng.uniform(0.10, 0.20)
            rows.append({
                "galaxy": g["name"], "quantity": "bulge_mass", "kind": "bulge",
                "log_obs": g["logmbulge_true"] + rng.gauss(0.0, err), "err": err,
                "limit": False, "method": "dynamical" if dyn else "photometric",
                "band": "", "k": 1 if dyn else 2, "reference": rng.choice(refs["bulge"]),
                "adopted": 1, "notes": [],
            })
        if g["has_luminosity"]:
            err = rng.uniform(0.05, 0.10)
            rows.append({
                "galaxy": g["name"], "quantity": "bulge_luminosity", "kind": "lum",
                "log_obs": g["loglum_true"] + rng.gauss(0.0, err), "err": err,
                "limit": False, "method": "", "band": g["band"], "k": 2,
                "reference": rng.choice(refs["luminosity"]), "adopted": 1, "notes": [],
            })

    by_name = {g["name"]: g for g in galaxies}

    # Resolution of dynamical rows; plant unresolved spheres of influence.
    def theta_of(row: dict) -> float:
        g = by_name[row["galaxy"]]
        return theta_infl_arcsec(row["log_obs"], g["sigma_written"], g["distance_mpc"])

    for row in rows:
        if row["kind"] != "bh":
            continue
        if row["method"] == "maser":
            row["resolution"] = 0.001
        elif row["method"] == "reverberation":
            row["resolution"] = None
        else:
            theta = theta_of(row)
            res = None
            for _ in range(200):
                inst = pick(rng, [("hst", 0.55), ("ao", 0.30), ("seeing", 0.15)])
                lo, hi = {"hst": (0.08, 0.12), "ao": (0.04, 0.10), "seeing": (0.5, 0.8)}[inst]
                trial = round(rng.uniform(lo, hi), 2 if inst != "seeing" else 1)
                # Upper limits keep whatever the instrument gave: a limit is often
                # what is left when the sphere of influence was not resolved.
                if row["limit"] or theta / trial >= 1.25:
                    res = trial
                    break
            if res is None:  # too small to resolve with any instrument here
                res = 0.03
            row["resolution"] = res

    unres_pool = [g["bh_row"] for g in galaxies
                  if g["role"] in ("stellar", "gas") and not g["outlier"]
                  and 0.04 <= theta_of(g["bh_row"]) <= 0.45
                  and theta_of(g["bh_row"]) / g["bh_row"]["resolution"] >= 1.0]
    for row in rng.sample(unres_pool, N_UNRESOLVED):
        theta = theta_of(row)
        res = min(0.8, max(0.03, round(theta * rng.uniform(1.3, 2.5), 2)))
        while theta / res >= 0.8:  # rounding must not bring it back near 1
            res = round(res + 0.01, 2)
        assert theta / res < 0.8, (row["galaxy"], theta, res)
        row["resolution"] = res
        row["notes"].append("planted: sphere of influence not resolved")
    for row in rows:
        if (row["kind"] == "bh" and row["method"] in DYNAMICAL and not row["limit"]
                and theta_of(row) / row["resolution"] < 1.0
                and not any("not resolved" in n for n in row["notes"])):
            row["notes"].append("sphere of influence not resolved")

    # Superseded older black-hole masses.
    sup_pool = [g for g in galaxies if g["role"] in ("stellar", "gas") and not g["outlier"]
                and not g["bh_row"]["notes"]]
    for g in rng.sample(sup_pool, N_SUPERSEDED):
        new = g["bh_row"]
        err = rng.uniform(0.20, 0.30)
        old = {
            "galaxy": g["name"], "quantity": "bh_mass", "kind": "bh",
            "log_obs": g["logm_true"] + rng.uniform(0.15, 0.45) + rng.gauss(0.0, 0.10),
            "err": err, "limit": False,
            "method": new["method"] if rng.random() < 0.7 else "stellar_dynamics",
            "band": "", "k": 1, "reference": rng.choice(refs["old"]), "adopted": 0,
            "resolution": round(rng.uniform(0.5, 0.8), 1),
            "notes": [f"superseded by {new['reference']}; seeing-limited"],
        }
        rows.append(old)

    # Source distances: ~15 % of the rows that carry one differ from the adopted one.
    with_dist = [r for r in rows if r["kind"] != "sigma"]
    n_mis = round(MISMATCH_FRACTION * len(with_dist))
    mismatched = set(id(r) for r in rng.sample(with_dist, n_mis))
    for r in with_dist:
        d_adopt = by_name[r["galaxy"]]["distance_mpc"]
        if id(r) in mismatched:
            while True:
                f = 1.0 + rng.choice([-1.0, 1.0]) * rng.uniform(0.06, 0.25)
                d_src = float(fmt_sig(d_adopt * f, 3))
                if 0.055 <= abs(d_src / d_adopt - 1.0) <= 0.26:
                    break
            r["notes"].append("source used an older distance")
        else:
            d_src = d_adopt
        r["source_distance"] = d_src
        r["log_src"] = r["log_obs"] + r["k"] * math.log10(d_src / d_adopt)

    # Write the typed values.
    for r in rows:
        if r["kind"] == "sigma":
            r["value"] = f"{r['sigma_value']} {pm(rng)} {r['sigma_err']}"
            continue
        if r["limit"]:
            r["value"] = format_limit(rng, r["log_src"])
            r["scale"] = rng.choice(["", "linear"])
            continue
        if r["kind"] == "bh":
            forms = [("asym", 0.30), ("sym_e", 0.15), ("sym_x", 0.15), ("log", 0.25),
                     ("dex", 0.15)]
        elif r["kind"] == "bulge":
            forms = [("sym_e", 0.30), ("sym_x", 0.15), ("asym", 0.15), ("log", 0.25),
                     ("dex", 0.15)]
        else:
            forms = [("log", 0.70), ("sym_e", 0.30)]
        form = pick(rng, forms)
        if form in ("sym_e", "sym_x") and r["err"] > 0.30:
            form = pick(rng, [("log", 0.5), ("dex", 0.2), ("asym", 0.3)])
        r["value"], r["scale"] = format_log_value(rng, r["log_src"], r["err"], form)

    galaxies.sort(key=lambda g: name_key(g["name"]))
    quantity_order = {"bh_mass": 0, "sigma": 1, "bulge_mass": 2, "bulge_luminosity": 3}
    rows.sort(key=lambda r: (name_key(r["galaxy"]), quantity_order[r["quantity"]],
                             -r["adopted"]))
    return galaxies, rows, {"seed": seed, "by_name": by_name}


# ----------------------------------------------------------------------------
# The second wave: activity classes and active nuclei (random.Random(seed + 1))
# ----------------------------------------------------------------------------

# The constants the service uses for virial products (server/astro/constants.rs).
C_KM_S = 299792.458  # speed of light, km/s
GM_SUN_M3_S2 = 1.3271244e20  # nominal solar mass parameter, m^3 s^-2
SECONDS_PER_DAY = 86400.0
# Bentz et al. 2013 radius-luminosity relation (Hbeta): log R[lt-day] = K + alpha log(L/1e44).
BENTZ_K, BENTZ_ALPHA = 1.527, 0.533
# Vestergaard & Peterson 2006 single-epoch calibration (Hbeta, FWHM): a, b.
VP06_ZERO, VP06_EXPONENT = 6.91, 0.50
# The service's starting log <f> (virial_factor rows of version 0, migration 9).
SERVICE_LOG_F = {"sigma_line": 0.64, "fwhm": 0.05}

DEMO_LOG_F = 0.70  # demo truth of log <f> for sigma_line (invented, not the service's 0.64)
DEMO_LOG_F_SCATTER = 0.20  # spread of the individual log f_i, dex
RL_SCATTER = 0.13  # scatter of the true lag about the radius-luminosity relation, dex
TYPED_VIRIAL_FACTOR = 5.5  # the linear f the "published" reverberation masses assumed

N_RM_NEW = 26  # new reverberation-mapped Seyfert 1 nuclei
RM_MORPHOLOGY = ["spiral"] * 15 + ["lenticular"] * 9 + ["elliptical"] * 2
N_RM_TYPED = 4  # of them typed as published masses with virial_factor 5.5
N_RM_ASYM = 10  # of them with asymmetric lag errors
N_RM_BULGE = 12  # of them with a bulge mass
N_SE = 10  # single-epoch nuclei
N_SE_QUASAR = 3  # the most luminous single-epoch nuclei are quasars
N_SE_BENTZ = 3  # single-epoch masses by the radius-luminosity route; the rest vp06
N_SE_SIGMA = 5  # single-epoch hosts with an observed sigma_e

# Activity of the first wave: fixed counts, drawn from the new generator.
N_MASER_SEYFERT2 = 4
N_OTHER_SEYFERT2 = 5
N_LINER = 6
N_RADIO = 3
N_UNKNOWN_ACTIVITY = 4

ACTIVITIES = ("quiescent", "seyfert1", "seyfert2", "liner", "quasar", "radio_galaxy", "unknown")

# server/catalog/virial.rs: VIRIAL_COLUMNS, in this order.
VIRIAL_COLUMNS = [
    "line", "width_definition", "width_spectrum", "lag_days", "lag_err_days", "width_km_s",
    "width_err_km_s", "log_l5100_erg_s", "virial_factor", "calibration",
]

# Invented name stems for the second wave (not used by the first).
AGN_STEMS = [
    "Sandrel", "Carrowen", "Dellisk", "Eskaron", "Fallowin", "Garnesse", "Hethrin",
    "Jolvane", "Kessamor", "Lorrick", "Nessaly", "Orvelle", "Pryndel", "Rossaly",
    "Tervoss", "Wyndrel",
]
# Invented author surnames for the active-nucleus papers.
AGN_AUTHORS = [
    "Quenwick", "Ellinsby", "Vessendal", "Orlandry", "Brackwyn", "Ostervane", "Tharnell",
    "Ysmark",
]


def virial_product_msun(lag_days: float, width_km_s: float) -> float:
    """VP = c tau width^2 / G in M_sun, as server/astro/agn.rs computes it."""
    radius_m = C_KM_S * 1.0e3 * (lag_days * SECONDS_PER_DAY)
    width_m_s = width_km_s * 1.0e3
    return radius_m * (width_m_s / GM_SUN_M3_S2) * width_m_s


def width_for_product(vp_msun: float, lag_days: float) -> float:
    """The line width (km/s) that gives the virial product vp_msun at lag_days."""
    return math.sqrt(vp_msun * GM_SUN_M3_S2 / (C_KM_S * 1.0e3 * lag_days * SECONDS_PER_DAY)) / 1.0e3


def bentz_radius_lt_days(log_l: float) -> float:
    return 10.0 ** (BENTZ_K + BENTZ_ALPHA * (log_l - 44.0))


def vp06_log_mass(fwhm_km_s: float, log_l: float) -> float:
    return VP06_ZERO + 2.0 * math.log10(fwhm_km_s / 1000.0) + VP06_EXPONENT * (log_l - 44.0)


def parse_lag_error(text: str, lag: float) -> tuple[float, float]:
    """(lower, upper) lag errors from "1.2" or "+1.4/-1.1", as the service reads them."""
    if not text:
        return 0.0, 0.0
    if text.startswith("+"):
        plus, minus = text[1:].split("/-")
        lo, up = float(minus), float(plus)
    else:
        lo = up = float(text)
    assert 0.0 <= lo < lag and 0.0 <= up < lag, (text, lag)
    return lo, up


def log_vp_errors(lag: float, lag_err: tuple[float, float], width: float,
                  width_err: float) -> tuple[float, float]:
    """First-order errors of log VP (dex), as server/catalog/virial.rs propagates them."""
    ln10 = math.log(10.0)
    w = 2.0 * width_err / (width * ln10)
    return math.hypot(lag_err[0] / (lag * ln10), w), math.hypot(lag_err[1] / (lag * ln10), w)


def centre_kind_for(rng: random.Random, morph: str, bulge: str, sigma: float) -> str:
    """The first wave's centre-kind rules (see the docstring)."""
    if morph == "elliptical" and sigma >= 230.0:
        return pick(rng, [("core", 0.80), ("power_law", 0.15), ("unknown", 0.05)])
    if morph == "elliptical":
        return pick(rng, [("core", 0.15), ("power_law", 0.75), ("unknown", 0.10)])
    if morph == "lenticular" and bulge == "classical":
        return pick(rng, [("core", 0.05), ("power_law", 0.60), ("unknown", 0.35)])
    if morph == "lenticular":
        return pick(rng, [("power_law", 0.50), ("unknown", 0.50)])
    return pick(rng, [("power_law", 0.35), ("unknown", 0.65)])


def distance_error(rng: random.Random, d: float, method: str) -> float:
    lo, hi = DIST_ERR_RANGE[method]
    while True:
        err = float(fmt_sig(d * rng.uniform(lo, hi), 2))
        if 0.05 <= err / d <= 0.15:
            return err


def sigma_row(rng: random.Random, name: str, sigma_true: float, refs: list[str]) -> dict:
    """An observed sigma_e row with the first wave's error model."""
    frac = rng.uniform(0.03, 0.08)
    obs = sigma_true * (1.0 + rng.gauss(0.0, frac))
    return {
        "galaxy": name, "quantity": "sigma", "kind": "sigma",
        "sigma_value": round(obs), "sigma_err": max(1, round(obs * frac)),
        "scale": rng.choice(["", "", "", "linear"]), "method": "",
        "sigma_definition": "sigma_e", "aperture": "r_e",
        "band": "", "k": 0, "reference": rng.choice(refs), "adopted": 1, "notes": [],
        "wave": 2,
    }


def add_agn(seed: int, galaxies: list[dict], rows: list[dict]) -> dict:
    """Add the activity classes and the invented active nuclei, from random.Random(seed + 1).

    The first wave (`build`) is not touched except for its new `activity` key, so its values,
    names and planted features stay as they were. Returns the model's truths for the summary.
    """
    rng = random.Random(seed + 1)
    first_refs = make_references(random.Random(seed))  # the first wave's pools, unchanged
    for g in galaxies:
        g["wave"] = 1
        g["activity"] = "quiescent"
    for r in rows:
        r["wave"] = 1

    # Activity of the first wave.
    for g in galaxies:
        if g["role"] == "reverberation":
            g["activity"] = "seyfert1"
    masers = [g for g in galaxies if g["role"] == "maser"]
    for g in rng.sample(masers, N_MASER_SEYFERT2):
        g["activity"] = "seyfert2"
    disks = [g for g in galaxies if g["morphology"] in ("spiral", "lenticular")
             and g["role"] not in ("maser", "reverberation")]
    for g in rng.sample(disks, N_OTHER_SEYFERT2):
        g["activity"] = "seyfert2"
    for g in rng.sample([g for g in disks if g["activity"] == "quiescent"], N_LINER):
        g["activity"] = "liner"
    cores = [g for g in galaxies if g["morphology"] == "elliptical" and g["centre_kind"] == "core"]
    for g in rng.sample(cores, N_RADIO):
        g["activity"] = "radio_galaxy"
    for g in rng.sample([g for g in galaxies if g["activity"] == "quiescent"], N_UNKNOWN_ACTIVITY):
        g["activity"] = "unknown"

    # Names and references of the second wave.
    used = {g["name"] for g in galaxies}
    names: list[str] = []
    while len(names) < N_RM_NEW + N_SE:
        stem = rng.choice(AGN_STEMS)
        name = f"{stem} {rng.randint(1, 399)}"
        if name in used or sum(x.startswith(stem + " ") for x in names) >= 3:
            continue
        used.add(name)
        names.append(name)
    authors = AGN_AUTHORS[:]
    rng.shuffle(authors)

    def ref(author: str, year: int) -> str:
        if rng.random() < 0.75:
            return f"{author} et al. {year} (demo)"
        return f"{author} & {rng.choice([a for a in AGN_AUTHORS if a != author])} {year} (demo)"

    rm_refs = [ref(a, rng.randint(2012, 2025)) for a in authors[:4]]
    se_refs = [ref(a, rng.randint(2014, 2025)) for a in authors[4:7]]
    new_galaxies: list[dict] = []
    new_rows: list[dict] = []
    truths: dict = {"rm_log_f": [], "rm_names": [], "se_names": []}

    # New reverberation-mapped Seyfert 1 nuclei.
    morphs = RM_MORPHOLOGY[:]
    rng.shuffle(morphs)
    typed = set(rng.sample(range(N_RM_NEW), N_RM_TYPED))
    asym = set(rng.sample(range(N_RM_NEW), N_RM_ASYM))
    with_bulge = set(rng.sample(range(N_RM_NEW), N_RM_BULGE))
    for i, morph in enumerate(morphs):
        name = names[i]
        sigma_true = 10.0 ** normal_truncated(rng, math.log10(120.0), 0.10,
                                              math.log10(60.0), math.log10(350.0))
        if morph == "elliptical":
            bulge = "classical"
        elif morph == "lenticular":
            bulge = pick(rng, [("classical", 0.60), ("pseudo", 0.30), ("unknown", 0.10)])
        else:
            bulge = pick(rng, [("classical", 0.45), ("pseudo", 0.45), ("unknown", 0.10)])
        centre = centre_kind_for(rng, morph, bulge, sigma_true)
        pseudo = bulge == "pseudo"
        offset = (OFFSET_PSEUDO if pseudo else 0.0) + (OFFSET_CORE if centre == "core" else 0.0)
        mean = MSIGMA_ZERO + MSIGMA_SLOPE * math.log10(sigma_true / MSIGMA_PIVOT_KM_S) + offset
        logm = normal_truncated(rng, mean, SCATTER_PSEUDO if pseudo else SCATTER_CLASSICAL,
                                4.0, 10.9)
        log_f = DEMO_LOG_F + rng.gauss(0.0, DEMO_LOG_F_SCATTER)
        log_vp = logm - log_f
        log_l = rng.uniform(42.6, 44.6)
        lag_true = bentz_radius_lt_days(log_l) * 10.0 ** rng.gauss(0.0, RL_SCATTER)
        width_true = width_for_product(10.0 ** log_vp, lag_true)
        # Observed lag and width.
        e_tau = rng.uniform(0.08, 0.20)
        while True:
            lag = float(fmt_sig(lag_true * (1.0 + rng.gauss(0.0, e_tau)), 3))
            if lag >= 0.3 * lag_true:
                break
        if i in asym:
            up = float(fmt_sig(e_tau * lag * rng.uniform(1.0, 1.4), 2))
            lo = float(fmt_sig(e_tau * lag * rng.uniform(0.7, 1.0), 2))
            lag_err = f"+{up:g}/-{lo:g}"
        else:
            lag_err = f"{float(fmt_sig(e_tau * lag, 2)):g}"
        e_w = rng.uniform(0.04, 0.08)
        width = round(width_true * (1.0 + rng.gauss(0.0, e_w)))
        width_err = max(1, round(e_w * width))
        log_l_obs = round(log_l + rng.gauss(0.0, 0.03), 2)
        # Distance.
        d = float(fmt_sig(log_uniform(rng, 15.0, 150.0), 3))
        if rng.random() < 0.75:
            dmethod = "hubble_flow"
        else:
            dmethod = "tully_fisher" if morph == "spiral" else "sbf"
        new_galaxies.append({
            "name": name, "morphology": morph, "bulge_kind": bulge, "centre_kind": centre,
            "distance_mpc": d, "distance_err_mpc": distance_error(rng, d, dmethod),
            "distance_method": dmethod, "activity": "seyfert1", "wave": 2,
        })
        virial = {
            "line": "Hbeta", "width_definition": "sigma_line", "width_spectrum": "rms",
            "lag_days": f"{lag:g}", "lag_err_days": lag_err, "width_km_s": str(width),
            "width_err_km_s": str(width_err), "log_l5100_erg_s": f"{log_l_obs:.2f}",
            "virial_factor": "", "calibration": "",
        }
        vp_obs = virial_product_msun(lag, width)
        errs = log_vp_errors(lag, parse_lag_error(lag_err, lag), width, width_err)
        row = {
            "galaxy": name, "quantity": "bh_mass", "kind": "virial", "method": "reverberation",
            "value": "", "scale": "", "band": "", "k": 0, "limit": False,
            "log_obs": math.log10(vp_obs), "err": 0.5 * sum(errs),
            "reference": rng.choice(rm_refs), "adopted": 1, "notes": [],
            "source_distance": d, "resolution": None, "virial": virial, "wave": 2,
        }
        if i in typed:
            # A published mass for f = 5.5, typed like the first wave's values.
            virial["virial_factor"] = f"{TYPED_VIRIAL_FACTOR:g}"
            row["log_obs"] = math.log10(TYPED_VIRIAL_FACTOR * vp_obs)
            form = pick(rng, [("asym", 0.30), ("sym_e", 0.30), ("log", 0.25), ("dex", 0.15)])
            row["value"], row["scale"] = format_log_value(
                rng, row["log_obs"], max(0.05, row["err"]), form)
        new_rows.append(row)
        new_rows.append(sigma_row(rng, name, sigma_true, first_refs["sigma"]))
        if i in with_bulge:
            dyn = rng.random() < 0.3
            err = rng.uniform(0.10, 0.20)
            mean_bulge = 11.0 + (logm - MBULGE_ZERO) / MBULGE_SLOPE
            log_bulge = normal_truncated(rng, mean_bulge, MBULGE_SCATTER, 7.0, 12.6)
            log_obs = log_bulge + rng.gauss(0.0, err)
            new_rows.append({
                "galaxy": name, "quantity": "bulge_mass", "kind": "bulge", "log_obs": log_obs,
                "err": err, "limit": False, "method": "dynamical" if dyn else "photometric",
                "band": "", "k": 1 if dyn else 2, "reference": rng.choice(first_refs["bulge"]),
                "adopted": 1, "notes": [], "source_distance": d, "log_src": log_obs,
                "wave": 2,
            })
        truths["rm_log_f"].append(log_f)
        truths["rm_names"].append(name)

    # Single-epoch nuclei.
    se = []
    for j in range(N_SE):
        se.append({"name": names[N_RM_NEW + j], "log_l": rng.uniform(43.0, 45.3),
                   "fwhm": rng.uniform(1500.0, 6000.0)})
    by_l = sorted(se, key=lambda s: -s["log_l"])
    for s in se:
        s["activity"] = "quasar" if s in by_l[:N_SE_QUASAR] else "seyfert1"
    bentz = set(rng.sample(range(N_SE), N_SE_BENTZ))
    with_sigma = set(rng.sample(range(N_SE), N_SE_SIGMA))
    for j, s in enumerate(se):
        name = s["name"]
        if s["activity"] == "quasar":
            morph = pick(rng, [("elliptical", 0.6), ("lenticular", 0.2), ("spiral", 0.2)])
        else:
            morph = pick(rng, [("spiral", 0.6), ("lenticular", 0.3), ("elliptical", 0.1)])
        bulge = "classical" if morph == "elliptical" else pick(
            rng, [("unknown", 0.6), ("classical", 0.4)])
        d = float(fmt_sig(log_uniform(rng, 60.0, 400.0), 3))
        new_galaxies.append({
            "name": name, "morphology": morph, "bulge_kind": bulge, "centre_kind": "unknown",
            "distance_mpc": d, "distance_err_mpc": distance_error(rng, d, "hubble_flow"),
            "distance_method": "hubble_flow", "activity": s["activity"], "wave": 2,
        })
        fwhm = round(s["fwhm"], -1)
        fwhm_err = max(1, round(fwhm * rng.uniform(0.05, 0.10)))
        log_l = round(s["log_l"], 2)
        calibration = "r_l_bentz13" if j in bentz else "vp06"
        if calibration == "vp06":
            log_m = vp06_log_mass(fwhm, log_l)
        else:
            log_m = math.log10(virial_product_msun(bentz_radius_lt_days(log_l), fwhm))
        new_rows.append({
            "galaxy": name, "quantity": "bh_mass", "kind": "virial", "method": "single_epoch",
            "value": "", "scale": "", "band": "", "k": 0, "limit": False, "log_obs": log_m,
            "err": None, "reference": rng.choice(se_refs), "adopted": 1, "notes": [],
            "source_distance": d, "resolution": None, "wave": 2,
            "virial": {
                "line": "Hbeta", "width_definition": "fwhm", "width_spectrum": "single",
                "lag_days": "", "lag_err_days": "", "width_km_s": f"{fwhm:g}",
                "width_err_km_s": str(fwhm_err), "log_l5100_erg_s": f"{log_l:.2f}",
                "virial_factor": "", "calibration": calibration,
            },
        })
        if j in with_sigma:
            # The host sits on the demo M-sigma relation at the vp06 mass of its spectrum.
            log_m_model = vp06_log_mass(fwhm, log_l)
            log_sigma = (math.log10(MSIGMA_PIVOT_KM_S) + (log_m_model - MSIGMA_ZERO) / MSIGMA_SLOPE
                         + rng.gauss(0.0, 0.07))
            sigma_true = min(350.0, max(60.0, 10.0 ** log_sigma))
            new_rows.append(sigma_row(rng, name, sigma_true, first_refs["sigma"]))
        truths["se_names"].append(name)

    # Write the new sigma values (the first wave's rows already have theirs).
    for r in new_rows:
        if r["kind"] == "sigma":
            r["value"] = f"{r['sigma_value']} {pm(rng)} {r['sigma_err']}"
        elif r["kind"] == "bulge":
            form = pick(rng, [("sym_e", 0.30), ("sym_x", 0.15), ("asym", 0.15), ("log", 0.25),
                              ("dex", 0.15)])
            r["value"], r["scale"] = format_log_value(rng, r["log_src"], r["err"], form)

    galaxies.extend(new_galaxies)
    rows.extend(new_rows)
    galaxies.sort(key=lambda g: name_key(g["name"]))
    quantity_order = {"bh_mass": 0, "sigma": 1, "bulge_mass": 2, "bulge_luminosity": 3}
    rows.sort(key=lambda r: (name_key(r["galaxy"]), quantity_order[r["quantity"]],
                             -r["adopted"]))
    return truths


# ----------------------------------------------------------------------------
# Output and self-checks
# ----------------------------------------------------------------------------

def galaxy_record(g: dict) -> list[str]:
    return [g["name"], g["morphology"], g["bulge_kind"], g["centre_kind"],
            fmt_sig(g["distance_mpc"], 3), fmt_sig(g["distance_err_mpc"], 2),
            g["distance_method"], g["activity"]]


def measurement_record(r: dict) -> list[str]:
    src = r.get("source_distance")
    res = r.get("resolution")
    return [
        r["galaxy"], r["quantity"], r["value"], r["scale"], r["method"],
        r.get("sigma_definition", ""), r.get("aperture", ""), r["band"],
        fmt_sig(src, 3) if src is not None else "",
        (f"{res:g}" if res is not None else ""),
        r["reference"], str(r["adopted"]), "; ".join(r["notes"]),
    ] + [r.get("virial", {}).get(c, "") for c in VIRIAL_COLUMNS]


def check(galaxies: list[dict], rows: list[dict], gal_csv: list[list[str]],
          meas_csv: list[list[str]]) -> dict:
    """Assert the constraints the catalog promises; return counts for the summary."""
    n = len(galaxies)
    assert n >= 90, n
    names = [g[0] for g in gal_csv]
    assert len(set(names)) == n, "names must be unique"
    for name in names:
        assert name_is_allowed(name), f"forbidden name: {name}"
        assert re.fullmatch(r"[^\W\d_]+ \d+", name), name
    non_ascii = [x for x in names if not x.isascii()]
    assert 1 <= len(non_ascii) <= 2, non_ascii

    morph = Counter(g[1] for g in gal_csv)
    assert set(morph) == {"elliptical", "lenticular", "spiral"}
    for g in gal_csv:
        assert g[2] in ("classical", "pseudo", "unknown")
        assert g[3] in ("core", "power_law", "unknown")
        if g[1] == "elliptical":
            assert g[2] == "classical"
        if g[2] == "pseudo":
            assert g[1] in ("spiral", "lenticular")
        d, e = float(g[4]), float(g[5])
        assert 2.0 <= d <= 120.0, g
        assert 0.05 <= e / d <= 0.15, g
        assert g[6] in DIST_ERR_RANGE, g
    assert set(g[6] for g in gal_csv) == set(DIST_ERR_RANGE), "every distance method used"
    bulge = Counter(g[2] for g in gal_csv)
    centre = Counter(g[3] for g in gal_csv)
    assert bulge["pseudo"] >= 8 and bulge["classical"] >= 40
    cores = [g for g in gal_csv if g[3] == "core"]
    assert len(cores) >= 6
    assert sum(g[1] == "elliptical" for g in cores) >= 2 * len(cores) / 3

    gal = {g[0]: g for g in gal_csv}
    adopted = Counter()
    quantities_by_galaxy: dict[str, set] = {}
    for rec in meas_csv:
        assert rec[0] in gal, rec
        assert rec[1] in quantity_order_keys()
        assert rec[10].endswith("(demo)"), rec
        assert rec[11] in ("0", "1")
        quantities_by_galaxy.setdefault(rec[0], set()).add(rec[1])
        if rec[11] == "1":
            adopted[(rec[0], rec[1])] += 1
    for gname, qs in quantities_by_galaxy.items():
        for q in qs:
            assert adopted[(gname, q)] == 1, (gname, q)
    assert all("sigma" in quantities_by_galaxy[x] and "bh_mass" in quantities_by_galaxy[x]
               for x in names)

    sigma_written = {x[0]: float(x[2].split()[0]) for x in meas_csv if x[1] == "sigma"}
    # Parse every value back, check ranges, and check that rescaling to the
    # adopted distance recovers the model's observed value.
    counts = Counter()
    for r, rec in zip(rows, meas_csv):
        q = rec[1]
        g = gal[rec[0]]
        d_adopt = float(g[4])
        if q == "sigma":
            m = re.fullmatch(r"(\d+) (?:±|\+/-) (\d+)", rec[2])
            assert m, rec
            s, e = int(m.group(1)), int(m.group(2))
            assert 20 <= s <= 600 and 0 < e < s
            assert 0.03 * s - 1.0 <= e <= 0.08 * s + 1.0, rec
            assert rec[5] in ("sigma_e", "sigma_c") and rec[6] and rec[8] == "" and rec[9] == ""
            assert rec[4] == "" and rec[7] == ""
            counts[rec[5]] += 1
            continue
        p = parse_value(rec[2], rec[3])
        assert rec[3] in ("", "linear", "log10")
        d_src = float(rec[8])
        assert 0.01 <= d_src <= 2000.0
        log_adopt = p["log"] + r["k"] * math.log10(d_adopt / d_src)
        if p["limit"]:
            assert abs(log_adopt - r["log_obs"]) <= 0.025, (rec, log_adopt, r["log_obs"])
        else:
            assert abs(log_adopt - r["log_obs"]) <= 0.02, (rec, log_adopt, r["log_obs"])
            assert 0.0 < p["minus"] <= 2.0 and 0.0 < p["plus"] <= 2.0, rec
        if abs(d_src / d_adopt - 1.0) > 1e-9:
            counts["distance_mismatch"] += 1
            assert 0.05 <= abs(d_src / d_adopt - 1.0) <= 0.26
        counts["with_source_distance"] += 1
        if q == "bh_mass":
            assert 3.0 <= p["log"] <= 11.5 and 3.0 <= log_adopt <= 11.5, rec
            assert rec[4] in ("stellar_dynamics", "gas_dynamics", "maser", "reverberation")
            assert rec[7] == "" and rec[5] == "" and rec[6] == ""
            if rec[11] == "1":
                counts[rec[4]] += 1
                if p["limit"]:
                    counts["upper_limits"] += 1
                    counts["upper_limits_" + rec[4]] += 1
            else:
                counts["superseded"] += 1
            if rec[4] == "reverberation":
                assert rec[9] == "" and 0.27 <= p["minus"] <= 0.45, rec
            elif rec[4] == "maser":
                assert rec[9] == "0.001" and p["minus"] <= 0.05
            else:
                res = float(rec[9])
                assert 0.03 <= res <= 0.8, rec
                sig = sigma_written[rec[0]]
                theta = theta_infl_arcsec(log_adopt, sig, d_adopt)
                if not p["limit"] and rec[11] == "1":
                    counts["dynamical_detections"] += 1
                    if theta / res < 1.0:
                        counts["unresolved_detections"] += 1
                    # The note was set from unrounded values: allow for rounding.
                    if theta / res < 0.95:
                        assert "not resolved" in rec[12], rec
                    if "not resolved" in rec[12]:
                        assert theta / res < 1.05, rec
                if theta / res < 1.0:
                    counts["unresolved_rows"] += 1
                    if "planted: sphere" in rec[12]:
                        counts["planted_unresolved"] += 1
                elif "planted: sphere" in rec[12]:
                    raise AssertionError(f"planted unresolved row is resolved: {rec}")
            if "planted outlier" in rec[12]:
                counts["outliers"] += 1
        elif q == "bulge_mass":
            assert 6.0 <= p["log"] <= 13.5 and rec[4] in ("dynamical", "photometric")
            assert rec[7] == "" and rec[9] == ""
            counts["bulge_mass"] += 1
        else:
            assert 6.0 <= p["log"] <= 13.5 and rec[7] in ("V", "K") and rec[4] == ""
            assert rec[9] == ""
            counts["bulge_luminosity"] += 1
            counts["band_" + rec[7]] += 1

    counts["galaxies"] = n
    counts["rows"] = len(meas_csv)
    assert counts["maser"] >= 8
    assert counts["gas_dynamics"] >= 25
    assert counts["reverberation"] >= 6
    assert counts["maser"] + counts["gas_dynamics"] + counts["reverberation"] \
        + counts["stellar_dynamics"] == n
    assert counts["upper_limits"] >= 10
    assert counts["upper_limits_gas_dynamics"] > counts["upper_limits"] / 2
    assert 3 <= counts["outliers"] <= 4
    assert counts["planted_unresolved"] >= 5
    assert counts["unresolved_detections"] <= 0.25 * counts["dynamical_detections"], counts
    assert counts["superseded"] >= 5
    assert 0.80 <= counts["bulge_mass"] / n <= 0.90
    assert 0.30 <= counts["bulge_luminosity"] / n <= 0.40
    assert 3 <= counts["sigma_c"] < counts["sigma_e"]
    assert 0.10 <= counts["distance_mismatch"] / counts["with_source_distance"] <= 0.20
    values = [rec[2] for rec in meas_csv]
    assert sum("+/-" in v for v in values) >= 3
    assert sum("±" in v for v in values) > 0.7 * len(values) - counts["upper_limits"] - 6
    return counts


def check_agn(galaxies: list[dict], rows: list[dict], gal_csv: list[list[str]],
              meas_csv: list[list[str]]) -> Counter:
    """Assert what the second wave promises, over the whole catalog; return its counts."""
    assert GALAXY_HEADER[N_FIRST_GALAXY_COLUMNS:] == ["activity"]
    assert MEASUREMENT_HEADER[N_FIRST_MEASUREMENT_COLUMNS:] == VIRIAL_COLUMNS
    names = [g[0] for g in gal_csv]
    assert len(set(names)) == len(names), "names must be unique"
    for name in names:
        assert name_is_allowed(name), f"forbidden name: {name}"
        assert re.fullmatch(r"[^\W\d_]+ \d+", name), name
    counts: Counter = Counter()
    gal = {g[0]: g for g in gal_csv}
    for g, rec in zip(galaxies, gal_csv):
        assert len(rec) == len(GALAXY_HEADER) and rec[0] == g["name"]
        assert rec[7] in ACTIVITIES, rec
        counts["activity_" + rec[7]] += 1
        if g["wave"] == 1:
            if g["role"] == "reverberation":
                assert rec[7] == "seyfert1", rec
            continue
        counts["new_galaxies"] += 1
        assert rec[7] in ("seyfert1", "quasar"), rec
        assert rec[1] in ("elliptical", "lenticular", "spiral")
        assert rec[2] in ("classical", "pseudo", "unknown")
        assert rec[3] in ("core", "power_law", "unknown")
        assert rec[1] != "elliptical" or rec[2] == "classical", rec
        assert rec[3] != "core" or rec[2] == "classical", rec
        d, e = float(rec[4]), float(rec[5])
        assert 15.0 <= d <= 400.0 and 0.05 <= e / d <= 0.15 and rec[6] in DIST_ERR_RANGE, rec

    adopted: Counter = Counter()
    quantities: dict[str, set] = {}
    for r, rec in zip(rows, meas_csv):
        assert len(rec) == len(MEASUREMENT_HEADER), rec
        assert rec[0] in gal and rec[10].endswith("(demo)"), rec
        quantities.setdefault(rec[0], set()).add(rec[1])
        adopted[(rec[0], rec[1])] += rec[11] == "1"
        g = gal[rec[0]]
        virial = dict(zip(VIRIAL_COLUMNS, rec[N_FIRST_MEASUREMENT_COLUMNS:]))
        is_virial = rec[1] == "bh_mass" and rec[4] in ("reverberation", "single_epoch")
        if not is_virial or r["wave"] == 1:
            # The first wave's reverberation masses stay typed, with no recorded factor.
            assert not any(virial.values()), rec
        if r["wave"] == 1:
            continue
        assert rec[11] == "1" and rec[12] == "" and rec[9] == "", rec
        if rec[1] == "sigma":
            m = re.fullmatch(r"(\d+) (?:±|\+/-) (\d+)", rec[2])
            assert m and rec[5] == "sigma_e" and rec[6] == "r_e" and rec[8] == "", rec
            s, e = int(m.group(1)), int(m.group(2))
            assert 20 <= s <= 600 and 0 < e < s and 0.03 * s - 1.0 <= e <= 0.08 * s + 1.0, rec
            counts["new_sigma"] += 1
            continue
        assert float(rec[8]) == float(g[4]), rec  # the second wave quotes the adopted distance
        if rec[1] == "bulge_mass":
            p = parse_value(rec[2], rec[3])
            assert rec[4] in ("dynamical", "photometric") and 6.0 <= p["log"] <= 13.5, rec
            assert abs(p["log"] - r["log_obs"]) <= 0.02 and 0.0 < p["minus"] <= 2.0, rec
            counts["new_bulge_mass"] += 1
            continue
        assert is_virial, rec
        assert virial["line"] == "Hbeta", rec
        width = float(virial["width_km_s"])
        width_err = float(virial["width_err_km_s"])
        log_l = float(virial["log_l5100_erg_s"])
        assert 10.0 <= width <= 100000.0 and 0.0 <= width_err <= width, rec
        assert 38.0 <= log_l <= 49.0, rec
        if rec[4] == "reverberation":
            assert g[7] == "seyfert1", rec
            assert (virial["width_definition"], virial["width_spectrum"]) == ("sigma_line", "rms")
            assert virial["calibration"] == "", rec
            lag = float(virial["lag_days"])
            assert 0.001 <= lag <= 10000.0, rec
            lag_err = parse_lag_error(virial["lag_err_days"], lag)
            counts["rm_asymmetric_lag"] += virial["lag_err_days"].startswith("+")
            assert 0.035 <= width_err / width <= 0.09, rec  # 4-8 %, rounded to km/s
            log_vp = math.log10(virial_product_msun(lag, width))
            errs = log_vp_errors(lag, lag_err, width, width_err)
            assert 0.0 < min(errs) and max(errs) <= 2.0, rec
            if rec[2] == "":
                assert virial["virial_factor"] == "" and rec[3] == "", rec
                assert abs(log_vp - r["log_obs"]) <= 1e-9, rec
                stored, assumed_log_f = log_vp, 0.0
                counts["rm_computed"] += 1
            else:
                f = float(virial["virial_factor"])
                assert 0.01 <= f <= 100.0, rec
                p = parse_value(rec[2], rec[3])
                assert not p["limit"] and 0.0 < p["minus"] <= 2.0 and 0.0 < p["plus"] <= 2.0
                assert abs(p["log"] - (log_vp + math.log10(f))) <= 0.02, rec
                stored, assumed_log_f = p["log"], math.log10(f)
                counts["rm_typed"] += 1
            # As shown: moved to the service's starting factor for sigma_line.
            shown = stored - assumed_log_f + SERVICE_LOG_F["sigma_line"]
            assert 3.0 <= stored <= 11.5 and 3.0 <= shown <= 11.5, rec
        else:
            assert g[7] in ("seyfert1", "quasar") and g[6] == "hubble_flow", rec
            assert 60.0 <= float(g[4]) <= 400.0, rec
            assert rec[2] == "" and rec[3] == "", rec
            assert virial["lag_days"] == "" and virial["lag_err_days"] == "", rec
            assert virial["virial_factor"] == "", rec
            assert (virial["width_definition"], virial["width_spectrum"]) == ("fwhm", "single")
            assert 1500.0 <= width <= 6000.0 and 43.0 <= log_l <= 45.3, rec
            if virial["calibration"] == "vp06":
                log_m = vp06_log_mass(width, log_l)
            else:
                assert virial["calibration"] == "r_l_bentz13", rec
                log_vp = math.log10(virial_product_msun(bentz_radius_lt_days(log_l), width))
                assert 3.0 <= log_vp <= 11.5, rec
                log_m = log_vp + SERVICE_LOG_F["fwhm"]
            assert 6.0 <= log_m <= 10.0, rec
            counts["se_" + virial["calibration"]] += 1
            counts["se_" + g[7]] += 1
    for (gname, q), n in adopted.items():
        assert n == 1, (gname, q)
    for g, rec in zip(galaxies, gal_csv):
        assert "bh_mass" in quantities[rec[0]], rec
        if "sigma" not in quantities[rec[0]]:
            assert g["wave"] == 2 and rec[0] in [x[0] for x in meas_csv
                                                if x[4] == "single_epoch"], rec
            counts["without_sigma"] += 1
    assert counts["new_galaxies"] == N_RM_NEW + N_SE
    assert counts["rm_computed"] >= 20 and counts["rm_typed"] == N_RM_TYPED
    assert counts["rm_computed"] + counts["rm_typed"] == N_RM_NEW
    assert counts["rm_asymmetric_lag"] == N_RM_ASYM
    assert counts["se_vp06"] == N_SE - N_SE_BENTZ and counts["se_r_l_bentz13"] == N_SE_BENTZ
    assert counts["without_sigma"] == N_SE - N_SE_SIGMA
    assert counts["new_sigma"] == N_RM_NEW + N_SE_SIGMA
    assert counts["new_bulge_mass"] == N_RM_BULGE
    assert counts["activity_seyfert1"] == 7 + N_RM_NEW + N_SE - N_SE_QUASAR
    assert counts["activity_quasar"] == N_SE_QUASAR
    assert counts["activity_seyfert2"] == N_MASER_SEYFERT2 + N_OTHER_SEYFERT2
    assert counts["activity_liner"] == N_LINER
    assert counts["activity_radio_galaxy"] == N_RADIO
    assert counts["activity_unknown"] == N_UNKNOWN_ACTIVITY
    return counts


def held_slope_log_f(points: list[tuple[float, float, float, float]], alpha: float,
                     beta: float, pivot: float) -> tuple[float, float, float]:
    """log <f>, its error from the AGN alone, and the AGN scatter, with the M-sigma slope held.

    points: (log sigma, its error, log VP, its error). The estimator of server/fit/virial.rs
    (`calibrate`): z_i = log VP_i - beta (x_i - x0), a = sum(w z) / sum(w),
    w = 1 / (eps^2 + s_i^2), s_i^2 = err_VP^2 + beta^2 err_x^2, eps by restricted maximum
    likelihood; log <f> = alpha - a. Only for the summary and the README.
    """
    d = [x - pivot for x, _, _, _ in points]
    z = [y - beta * di for (_, _, y, _), di in zip(points, d)]
    s2 = [ey * ey + (beta * ex) ** 2 for _, ex, _, ey in points]

    def neg_l(eps: float) -> float:
        w = [1.0 / (eps * eps + s) for s in s2]
        sw = sum(w)
        mean = sum(wi * zi for wi, zi in zip(w, z)) / sw
        return 0.5 * (math.log(sw) + sum(-math.log(wi) + wi * (zi - mean) ** 2
                                         for wi, zi in zip(w, z)))

    lo, hi = 0.0, 2.0
    for _ in range(200):  # golden section (the profile has one maximum here)
        m1, m2 = hi - 0.618034 * (hi - lo), lo + 0.618034 * (hi - lo)
        if neg_l(m1) < neg_l(m2):
            hi = m2
        else:
            lo = m1
    eps = 0.5 * (lo + hi)
    w = [1.0 / (eps * eps + s) for s in s2]
    a = sum(wi * zi for wi, zi in zip(w, z)) / sum(w)
    return alpha - a, math.sqrt(1.0 / sum(w)), eps


# The default M-sigma fit of the demo as the server gives it (README.md, "What the fits give").
README_MSIGMA_ALPHA, README_MSIGMA_BETA = 8.30, 6.03


def agn_points(rows: list[dict], meas_csv: list[list[str]]) -> list[tuple[float, ...]]:
    """(log sigma, err, log VP, err) of the second wave's reverberation nuclei, from the cells."""
    sigma: dict[str, tuple[float, float]] = {}
    vp: dict[str, tuple[float, float]] = {}
    for r, rec in zip(rows, meas_csv):
        if r["wave"] != 2:
            continue
        if rec[1] == "sigma":
            s, e = (float(x) for x in re.split(r" (?:±|\+/-) ", rec[2]))
            sigma[rec[0]] = (math.log10(s), e / (s * math.log(10.0)))
        elif rec[4] == "reverberation":
            v = dict(zip(VIRIAL_COLUMNS, rec[N_FIRST_MEASUREMENT_COLUMNS:]))
            lag, width = float(v["lag_days"]), float(v["width_km_s"])
            errs = log_vp_errors(lag, parse_lag_error(v["lag_err_days"], lag), width,
                                 float(v["width_err_km_s"]))
            vp[rec[0]] = (math.log10(virial_product_msun(lag, width)), 0.5 * sum(errs))
    return [sigma[n] + vp[n] for n in sorted(vp, key=name_key)]


def quantity_order_keys() -> tuple[str, ...]:
    return ("bh_mass", "sigma", "bulge_mass", "bulge_luminosity")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED)
    parser.add_argument("--out-dir", type=Path, default=Path(__file__).resolve().parent)
    args = parser.parse_args()

    galaxies, rows, _ = build(args.seed)
    truths = add_agn(args.seed, galaxies, rows)
    gal_csv = [galaxy_record(g) for g in galaxies]
    meas_csv = [measurement_record(r) for r in rows]
    # The first wave passes its own checks on its own columns, as before the second wave.
    first = [i for i, g in enumerate(galaxies) if g["wave"] == 1]
    first_rows = [i for i, r in enumerate(rows) if r["wave"] == 1]
    counts = check([galaxies[i] for i in first], [rows[i] for i in first_rows],
                   [gal_csv[i][:N_FIRST_GALAXY_COLUMNS] for i in first],
                   [meas_csv[i][:N_FIRST_MEASUREMENT_COLUMNS] for i in first_rows])
    agn = check_agn(galaxies, rows, gal_csv, meas_csv)

    args.out_dir.mkdir(parents=True, exist_ok=True)
    with open(args.out_dir / "demo-galaxies.csv", "w", encoding="utf-8", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(GALAXY_HEADER)
        w.writerows(gal_csv)
    with open(args.out_dir / "demo-measurements.csv", "w", encoding="utf-8", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(MEASUREMENT_HEADER)
        w.writerows(meas_csv)

    morph = Counter(g[1] for g in gal_csv)
    bulge = Counter(g[2] for g in gal_csv)
    centre = Counter(g[3] for g in gal_csv)
    dmeth = Counter(g[6] for g in gal_csv)
    print(f"seed {args.seed}: first wave {counts['galaxies']} galaxies, {counts['rows']} "
          f"measurement rows; with the second wave {len(gal_csv)} galaxies, "
          f"{len(meas_csv)} rows (counts below: all galaxies, then the first wave)")
    print("  morphology:", dict(sorted(morph.items())))
    print("  bulge kind:", dict(sorted(bulge.items())))
    print("  centre kind:", dict(sorted(centre.items())))
    print("  distance method:", dict(sorted(dmeth.items())))
    print(f"  adopted bh_mass: stellar_dynamics {counts['stellar_dynamics']}, "
          f"gas_dynamics {counts['gas_dynamics']}, maser {counts['maser']}, "
          f"reverberation {counts['reverberation']}")
    print(f"  upper limits {counts['upper_limits']} "
          f"(gas dynamics {counts['upper_limits_gas_dynamics']})")
    print(f"  sigma: sigma_e {counts['sigma_e']}, sigma_c {counts['sigma_c']}")
    print(f"  bulge_mass {counts['bulge_mass']}, bulge_luminosity {counts['bulge_luminosity']} "
          f"(V {counts['band_V']}, K {counts['band_K']})")
    print(f"  planted outliers {counts['outliers']}; adopted dynamical detections with "
          f"unresolved sphere of influence {counts['unresolved_detections']}"
          f"/{counts['dynamical_detections']} (planted {counts['planted_unresolved']}); "
          f"all unresolved dynamical rows incl. limits and superseded "
          f"{counts['unresolved_rows']}")
    print(f"  superseded bh_mass rows {counts['superseded']}")
    print(f"  source distance differs from adopted: {counts['distance_mismatch']}"
          f"/{counts['with_source_distance']} rows")
    activity = {a: agn["activity_" + a] for a in ACTIVITIES}
    print(f"  second wave: {agn['new_galaxies']} galaxies; activity {activity}")
    print(f"  reverberation masses: {agn['rm_computed']} computed from lag and sigma_line, "
          f"{agn['rm_typed']} typed with f = {TYPED_VIRIAL_FACTOR:g} "
          f"({agn['rm_asymmetric_lag']} asymmetric lag errors), 7 first-wave typed without f")
    print(f"  single-epoch masses: vp06 {agn['se_vp06']}, r_l_bentz13 {agn['se_r_l_bentz13']}; "
          f"seyfert1 {agn['se_seyfert1']}, quasar {agn['se_quasar']}; "
          f"{agn['without_sigma']} hosts without sigma")
    mean_f = sum(truths["rm_log_f"]) / len(truths["rm_log_f"])
    print(f"  drawn log f_i: mean {mean_f:.3f} over {len(truths['rm_log_f'])} "
          f"(model {DEMO_LOG_F:.2f})")
    points = agn_points(rows, meas_csv)
    pivot = math.log10(MSIGMA_PIVOT_KM_S)
    log_f, err, eps = held_slope_log_f(points, README_MSIGMA_ALPHA, README_MSIGMA_BETA, pivot)
    log_f_model = held_slope_log_f(points, MSIGMA_ZERO, MSIGMA_SLOPE, pivot)[0]
    print(f"  held-slope log <f> against the default M-sigma fit (alpha {README_MSIGMA_ALPHA}, "
          f"beta {README_MSIGMA_BETA}): {log_f:.2f} +/- {err:.2f} (AGN part), "
          f"eps_AGN {eps:.2f}; at the model slope {MSIGMA_SLOPE}: {log_f_model:.2f}")
    print("  all self-checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
