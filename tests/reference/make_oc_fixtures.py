#!/usr/bin/env python3
"""Fixture for the O-C ephemeris fit (tests/pulsator_discovery.rs).

Invented times of maximum of invented stars, and numpy's weighted linear
least squares of T = E + P (n - n0) over the cycle numbers n the old
ephemeris assigns (n0 the cycle nearest the weighted mean cycle), with the
old period as prior information (one more row, P = old_p with weight
1/old_pe^2; dropped when the maxima alone put the period more than 3 sigma
from it), the covariance (A^T W A)^-1 of the whole system, scaled by
chi2/dof when the scatter exceeds the errors (errors set by the scatter
about the fit without the prior when none are given). Offline; run from
the repository root:

    python3 tests/reference/make_oc_fixtures.py

writes tests/reference/oc_fixtures.json.
"""
import json

import numpy as np

rng = np.random.default_rng(20261203)


def case(name, old_p, old_e, old_pe, true_p, true_e, cycles, errs):
    t = true_e + true_p * np.array(cycles, dtype=float)
    if errs is None:
        t = t + rng.normal(0.0, 0.004, len(cycles))
        e = None
    else:
        e = np.array(errs, dtype=float)
        t = t + rng.normal(0.0, 1.0, len(cycles)) * e
    n = np.round((t - old_e) / old_p).astype(int)
    w = np.ones(len(n)) if e is None else 1.0 / e**2
    nbar = np.sum(w * n) / np.sum(w)
    # Round half up (rung's rule; numpy's round goes to even).
    n0 = int(np.floor(nbar + 0.5))
    a = np.column_stack([np.ones(len(n)), n - n0])
    y = t - old_e

    def fit(w, prior):
        # The prior on the period is one more row of the whitened system:
        # P = old_p with weight 1/old_pe^2.
        sw = np.sqrt(w)
        aw, yw = a * sw[:, None], y * sw
        if prior:
            aw = np.vstack([aw, [0.0, 1.0 / old_pe]])
            yw = np.append(yw, old_p / old_pe)
        coef, *_ = np.linalg.lstsq(aw, yw, rcond=None)
        cov = np.linalg.inv(aw.T @ aw)
        chi2 = float(np.sum((yw - aw @ coef) ** 2))
        return coef, cov, chi2

    if e is None:
        # The scatter about the fit without the prior sets the errors.
        _, _, chi2 = fit(w, False)
        w = np.ones(len(n)) / (chi2 / (len(n) - 2))
    coef0, cov0, _ = fit(w, False)
    # The prior unless the maxima put the period more than 3 sigma from it.
    prior = abs(coef0[1] - old_p) <= 3 * np.sqrt(cov0[1, 1] + old_pe**2)
    coef, cov, chi2 = fit(w, prior)
    dof = len(n) - 2 + (1 if prior else 0)
    if e is not None and chi2 / dof > 1:
        cov = cov * chi2 / dof
    return {
        "name": name,
        "old_period_d": old_p,
        "old_epoch_bjd": old_e,
        "old_period_err_d": old_pe,
        "maxima": [[float(ti), (None if e is None else float(ei))] for ti, ei in zip(t, (e if e is not None else [None] * len(t)))],
        "cycles": [int(x) for x in n],
        "prior": bool(prior),
        "numpy": {
            "period_d": float(coef[1]),
            "epoch_bjd": float(old_e + coef[0]),
            "period_err_d": float(np.sqrt(cov[1, 1])),
            "epoch_err_d": float(np.sqrt(cov[0, 0])),
            "cov_d2": float(cov[0, 1]),
        },
    }


cases = [
    # A Cepheid whose period drifted: old 9.87 d, true 9.8731 d.
    case("cepheid-drift", 9.87, 2461003.1808, 0.0002, 9.8731, 2461003.1850, [3, 17, 29, 41, 44, 58, 60, 71], [0.02, 0.02, 0.03, 0.015, 0.02, 0.025, 0.02, 0.02]),
    # An RR Lyrae star, maxima timed to a few minutes.
    case("rrlyrae", 0.5512, 2461000.1200, 0.00001, 0.551234, 2461000.1210, [0, 45, 180, 400, 720, 1100, 1500], [0.002, 0.002, 0.003, 0.002, 0.004, 0.002, 0.003]),
    # No errors given: the scatter sets them.
    case("no-errors", 4.2, 2461010.5, 0.001, 4.2012, 2461010.51, [1, 9, 20, 33, 47, 61], None),
    # Three maxima over a few cycles and a good catalogue period: the prior
    # carries most of the period.
    case("prior-helps", 5.05, 2461005.0170, 0.0001, 5.05004, 2461005.0200, [40, 42, 45], [0.03, 0.03, 0.03]),
]
out = {"numpy": np.__version__, "cases": cases}
with open("tests/reference/oc_fixtures.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print(json.dumps(out, indent=1)[:1500])
