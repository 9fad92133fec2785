#!/usr/bin/env python3
"""Fixture for rung's periodogram (tests/pulsator_discovery.rs).

astropy's LombScargle (floating mean, standard normalisation, with errors)
on invented light curves of invented stars, sampled at invented times: a
geometric series of observations (Saunders, Naylor & Allan 2006) clamped
into nightly windows of 0.30 d, and one visit a night at the same clock
time. Also the spectral window |sum exp(2 pi i nu t)| / N by numpy.
Offline; run from the repository root:

    python3 tests/reference/make_lombscargle_fixtures.py

writes tests/reference/lombscargle_fixtures.json.
"""
import json

import astropy
import numpy as np
from astropy.timeseries import LombScargle

SEED = 20261203
rng = np.random.default_rng(SEED)


def geometric_times(n, span, x, night_len=0.30):
    k = np.arange(n)
    t = span * (x**k - 1.0) / (x ** (n - 1) - 1.0)
    # Clamp each instant into the night it falls in (nights start at whole days).
    day = np.floor(t)
    frac = np.minimum(t - day, night_len)
    t = day + frac
    # Keep instants 10 minutes apart at least.
    for i in range(1, n):
        t[i] = max(t[i], t[i - 1] + 600.0 / 86400.0)
    return t


def case(name, t, period, semi_amp, sigma, f_min, f_max):
    phase0 = rng.uniform()
    y = 15.0 - semi_amp * np.cos(2 * np.pi * (t / period - phase0)) + rng.normal(0.0, sigma, len(t))
    dy = sigma * (1.0 + 0.5 * rng.uniform(size=len(t)))
    span = t.max() - t.min()
    freqs = np.linspace(f_min, f_max, 400)
    ls = LombScargle(t, y, dy)
    power = ls.power(freqs)
    fine = np.arange(f_min, f_max, 1.0 / (200.0 * span))
    best = fine[np.argmax(ls.power(fine))]
    window = np.abs(np.exp(2j * np.pi * np.outer(freqs, t)).sum(axis=1)) / len(t)
    return {
        "name": name,
        "period_d": period,
        "t_d": t.tolist(),
        "mag": y.tolist(),
        "err_mag": dy.tolist(),
        "freq_cpd": freqs.tolist(),
        "power": power.tolist(),
        "best_freq_cpd": float(best),
        "best_grid_step_cpd": 1.0 / (200.0 * span),
        "window": window.tolist(),
    }


cases = [
    case("geometric-0.55d", geometric_times(24, 29.0, 1.2), 0.55, 0.25, 0.02, 0.2, 3.4),
    case("geometric-3.1d", geometric_times(30, 40.0, 1.12), 3.1, 0.30, 0.03, 0.1, 2.5),
    case("nightly-0.55d", np.arange(24) * 1.0 + 0.1, 0.55, 0.25, 0.02, 0.2, 3.4),
]
out = {"astropy": astropy.__version__, "numpy": np.__version__, "seed": SEED, "cases": cases}
with open("tests/reference/lombscargle_fixtures.json", "w") as f:
    json.dump(out, f)
    f.write("\n")
for c in cases:
    print(c["name"], "best", c["best_freq_cpd"], "1/P", 1 / c["period_d"])
