#!/usr/bin/env python3
"""Timing of the conditional maximum-likelihood fit in scipy, for comparison with
`cargo bench --bench fit` (benches/fit.rs).

Same model and data sizes as the Rust benchmark: an invented M-sigma-like sample
(log sigma ~ N(2.3, 0.14^2), log M = 8.3 + 4.5 (x - x0) + N(0, 0.35^2), sigma errors
0.01-0.035 dex, mass errors 0.05-0.3 dex, every 7th object an upper limit 0.3 dex above its
mass), pivot x0 = log10(200).  The fit minimises the conditional -2 ln L of docs/methods.md
§2.1–2.2,

    V_i = sy_i^2 + beta^2 sx_i^2 + eps^2,  r_i = y_i - alpha - beta d_i,
    -2 ln L = sum_det [r^2/V + ln(2 pi V)] - 2 sum_lim ln Phi(r/sqrt(V)),

with scipy.optimize.minimize(method="L-BFGS-B") and its analytic gradient, eps bounded
below by 0, from the ordinary-least-squares start.  Run:  python3 benches/reference_fit.py
"""

import math
import platform
import time

import numpy as np
import scipy
from scipy import optimize, special

PIVOT = math.log10(200.0)
LN_2PI = math.log(2.0 * math.pi)


def sample(n, seed):
    rng = np.random.default_rng(seed)
    xi = 2.3 + 0.14 * rng.normal(size=n)
    eta = 8.3 + 4.5 * (xi - PIVOT) + 0.35 * rng.normal(size=n)
    sx = rng.uniform(0.01, 0.035, n)
    sy = rng.uniform(0.05, 0.3, n)
    x = xi + sx * rng.normal(size=n)
    lim = (np.arange(n) % 7) == 3
    y = np.where(lim, eta + 0.3, eta + sy * rng.normal(size=n))
    sy = np.where(lim, 0.0, sy)
    return x - PIVOT, sx, y, sy, lim


def neg2_and_grad(theta, d, sx, y, sy, lim):
    alpha, beta, eps = theta
    v = sy**2 + beta**2 * sx**2 + eps**2
    r = y - alpha - beta * d
    det = ~lim
    # Detections.
    rd, vd = r[det], v[det]
    f = np.sum(rd**2 / vd + np.log(vd) + LN_2PI)
    dv_dbeta = 2.0 * beta * sx**2
    # d/dalpha, d/dbeta, d/deps of r^2/V + ln V.
    g_r = 2.0 * rd / vd  # d(r^2/V)/dr, times dr/dtheta
    g_v = (1.0 / vd - rd**2 / vd**2)  # times dV/dtheta
    ga = np.sum(g_r * -1.0)
    gb = np.sum(g_r * -d[det] + g_v * dv_dbeta[det])
    ge = np.sum(g_v * 2.0 * eps)
    # Limits: -2 ln Phi(z), z = r / sqrt(V).
    rl, vl = r[lim], v[lim]
    sl = np.sqrt(vl)
    z = rl / sl
    lphi = special.log_ndtr(z)
    f += np.sum(-2.0 * lphi)
    # d ln Phi(z)/dz = phi(z)/Phi(z) = exp(ln phi - ln Phi).
    mills = np.exp(-0.5 * z**2 - 0.5 * LN_2PI - lphi)
    dz_dalpha = -1.0 / sl
    dz_dbeta = -d[lim] / sl - 0.5 * z / vl * dv_dbeta[lim]
    dz_deps = -0.5 * z / vl * 2.0 * eps
    ga += np.sum(-2.0 * mills * dz_dalpha)
    gb += np.sum(-2.0 * mills * dz_dbeta)
    ge += np.sum(-2.0 * mills * dz_deps)
    return f, np.array([ga, gb, ge])


def fit(data):
    d, sx, y, sy, lim = data
    det = ~lim
    b, a = np.polyfit(d[det], y[det], 1)
    res = y[det] - a - b * d[det]
    e = math.sqrt(max(np.var(res) - np.mean(sy[det] ** 2), 0.01))
    return optimize.minimize(neg2_and_grad, np.array([a, b, e]), args=data, jac=True,
                             method="L-BFGS-B",
                             bounds=[(None, None), (None, None), (0.0, None)],
                             options={"ftol": 1e-12, "gtol": 1e-8})


def check_gradient(data):
    theta = np.array([8.2, 4.2, 0.3])
    _, g = neg2_and_grad(theta, *data)
    h = 1e-6
    for i in range(3):
        e = np.zeros(3)
        e[i] = h
        num = (neg2_and_grad(theta + e, *data)[0] - neg2_and_grad(theta - e, *data)[0]) / (2 * h)
        assert abs(num - g[i]) <= 1e-5 * max(1.0, abs(num)), (i, num, g[i])


def time_it(data, min_seconds=3.0, min_runs=5):
    """Median and minimum wall time per fit over repeated runs (the machine is shared, so the
    minimum is the figure least disturbed by other load, as timeit recommends)."""
    fit(data)  # warm-up
    times, start = [], time.perf_counter()
    while True:
        t0 = time.perf_counter()
        res = fit(data)
        times.append(time.perf_counter() - t0)
        if time.perf_counter() - start >= min_seconds and len(times) >= min_runs:
            return float(np.median(times)), min(times), res


def main():
    print(f"python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}")
    for n, seed in [(60, 1), (100_000, 2)]:
        data = sample(n, seed)
        check_gradient(data)
        median, best, res = time_it(data)
        print(f"conditional ML, {n:>7} objects: median {median * 1e3:9.3f} ms, "
              f"minimum {best * 1e3:9.3f} ms per fit "
              f"(nfev {res.nfev}, beta {res.x[1]:.4f}, success {res.success})")


if __name__ == "__main__":
    main()
