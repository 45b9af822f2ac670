#!/usr/bin/env python3
"""Independent reference values of massline's planar likelihoods with correlated errors.

Writes tests/reference/plane/plane_cov_12.json: a small invented sample (12 objects, two of
them upper limits) for the plane

    y = alpha + beta (x - x0) + gamma (x2 - x02) + e,   e ~ N(0, eps^2)

whose measurement errors (dx, dx2, dy) have the full covariance

    S = [[sx^2,  sxx2,  sxy ],
         [sxx2,  sx2^2, sx2y],
         [sxy,   sx2y,  sy^2]]

(a distance error shared by the quantities that depend on distance; docs/methods.md §3.2),
and -2 ln L at fixed parameters for

* the conditional likelihood (docs/methods.md §2.7): y - mu(x, x2) = e + dy - beta dx -
  gamma dx2, so V = a^T S a + eps^2 with a = (-beta, -gamma, 1), evaluated here as that
  quadratic form (massline expands it); detections r^2/V + ln(2 pi V), limits
  -2 ln Phi(r / sqrt(V));
* the structural likelihood with one bivariate Gaussian for the true (x, x2) (Kelly 2007,
  ApJ 665, 1489; docs/methods.md §2.7): (x, x2, y) is trivariate normal with mean
  (mu, mu2, alpha + beta (mu - x0) + gamma (mu2 - x02)) and covariance B Sxi B^T + diag(0, 0,
  eps^2) + S, B = [[1, 0], [0, 1], [beta, gamma]]; detections use scipy's trivariate
  normal density (massline factorises it), limits the bivariate density of (x, x2) times
  Phi of y given (x, x2).

Each is given with the covariances and with them set to zero. The code shares nothing with
massline: it is written from the equations above.

Run from the project root:  python3 tests/reference/plane_reference.py
"""

import json
import math
import pathlib
import platform

import numpy as np
import scipy
from scipy import special, stats

X0 = math.log10(200.0)
X02 = 10.9
LN_2PI = math.log(2.0 * math.pi)
OUT = pathlib.Path(__file__).resolve().parent / "plane"

# Fixed parameters at which the likelihoods are evaluated (invented, near the sample's truth).
THETA = {"alpha": 8.3, "beta": 3.1, "gamma": 0.55, "eps": 0.28}
X_MODEL = {"mu_1": 2.29, "tau_1": 0.11, "mu2_1": 10.85, "tau2_1": 0.33, "rho_1": 0.45}


def make_sample(rng, n=12, n_limits=2):
    """Invented objects: a shared distance error (p = 1 for M_BH, 1 or 2 for M_bulge, and
    for a few rows 1 for x as well, to exercise the x-x2 term) on top of independent
    measurement errors; the limits come last and carry no error of their own."""
    points = []
    for i in range(n):
        xi = rng.normal(2.3, 0.12)
        xi2 = rng.normal(10.9, 0.35)
        eta = 8.3 + 3.0 * (xi - X0) + 0.5 * (xi2 - X02) + rng.normal(0.0, 0.3)
        s_logd = rng.uniform(0.03, 0.15)
        p_y = 1.0
        p_x2 = 2.0 if i % 3 == 0 else 1.0
        p_x = 1.0 if i % 4 == 1 else 0.0
        mx, mx2, my = rng.uniform(0.01, 0.04), rng.uniform(0.05, 0.2), rng.uniform(0.05, 0.3)
        shared = rng.normal(0.0, s_logd)
        limit = i >= n - n_limits
        x = xi + p_x * shared + rng.normal(0.0, mx)
        x2 = xi2 + p_x2 * shared + rng.normal(0.0, mx2)
        point = {
            "name": f"X {201 + i}",
            "x": x,
            "x_err": math.hypot(mx, p_x * s_logd),
            "x2": x2,
            "x2_err": math.hypot(mx2, p_x2 * s_logd),
            "x_x2_cov": p_x * p_x2 * s_logd**2,
            "upper_limit": limit,
        }
        if limit:
            point.update({"y": eta + rng.uniform(0.1, 0.6), "y_err": 0.0, "xy_cov": 0.0,
                          "x2_y_cov": 0.0})
        else:
            point.update({"y": eta + p_y * shared + rng.normal(0.0, my),
                          "y_err": math.hypot(my, p_y * s_logd),
                          "xy_cov": p_x * p_y * s_logd**2,
                          "x2_y_cov": p_x2 * p_y * s_logd**2})
        points.append(point)
    return points


def measurement_cov(p, with_cov):
    c = 1.0 if with_cov else 0.0
    return np.array([
        [p["x_err"] ** 2, c * p["x_x2_cov"], c * p["xy_cov"]],
        [c * p["x_x2_cov"], p["x2_err"] ** 2, c * p["x2_y_cov"]],
        [c * p["xy_cov"], c * p["x2_y_cov"], p["y_err"] ** 2],
    ])


def conditional_neg2(points, with_cov):
    a, b, g, e = THETA["alpha"], THETA["beta"], THETA["gamma"], THETA["eps"]
    vec = np.array([-b, -g, 1.0])
    total = 0.0
    for p in points:
        v = vec @ measurement_cov(p, with_cov) @ vec + e**2
        r = p["y"] - (a + b * (p["x"] - X0) + g * (p["x2"] - X02))
        if p["upper_limit"]:
            total += -2.0 * special.log_ndtr(r / math.sqrt(v))
        else:
            total += r * r / v + math.log(v) + LN_2PI
    return total


def structural_neg2(points, with_cov):
    a, b, g, e = THETA["alpha"], THETA["beta"], THETA["gamma"], THETA["eps"]
    mu, tau, mu2, tau2, rho = (X_MODEL[k] for k in ("mu_1", "tau_1", "mu2_1", "tau2_1", "rho_1"))
    s_xi = np.array([[tau**2, rho * tau * tau2], [rho * tau * tau2, tau2**2]])
    bmat = np.array([[1.0, 0.0], [0.0, 1.0], [b, g]])
    mean = np.array([mu, mu2, a + b * (mu - X0) + g * (mu2 - X02)])
    total = 0.0
    for p in points:
        cov = bmat @ s_xi @ bmat.T + np.diag([0.0, 0.0, e**2]) + measurement_cov(p, with_cov)
        obs = np.array([p["x"], p["x2"], p["y"]])
        if p["upper_limit"]:
            ln_px = stats.multivariate_normal(mean[:2], cov[:2, :2]).logpdf(obs[:2])
            k = np.linalg.solve(cov[:2, :2], cov[:2, 2])
            m_y = mean[2] + k @ (obs[:2] - mean[:2])
            s_y = math.sqrt(cov[2, 2] - cov[2, :2] @ k)
            total += -2.0 * (ln_px + special.log_ndtr((obs[2] - m_y) / s_y))
        else:
            total += -2.0 * stats.multivariate_normal(mean, cov).logpdf(obs)
    return total


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(1207)
    points = make_sample(rng)
    fixture = {
        "name": "plane_cov_12",
        "description": "Invented plane sample (no real objects) with x-x2, x-y and x2-y error "
                       "covariances, and -2 ln L at fixed parameters by "
                       "tests/reference/plane_reference.py.",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "scipy": scipy.__version__},
        "pivot": X0,
        "pivot2": X02,
        "theta": THETA,
        "x_model": X_MODEL,
        "points": points,
        "conditional_neg2_log_l": conditional_neg2(points, True),
        "conditional_neg2_log_l_without_covariances": conditional_neg2(points, False),
        "structural_neg2_log_l": structural_neg2(points, True),
        "structural_neg2_log_l_without_covariances": structural_neg2(points, False),
    }
    path = OUT / "plane_cov_12.json"
    path.write_text(json.dumps(fixture, indent=1) + "\n")
    print(f"{path.name}: conditional {fixture['conditional_neg2_log_l']:.12f}, "
          f"structural {fixture['structural_neg2_log_l']:.12f}")


if __name__ == "__main__":
    main()
