"""Quantiles of the nights needed for k clear ones, from scipy's negative binomial.

Usage (from the repository root):  python3 tests/reference/make_budget_weather_fixtures.py
Writes tests/reference/budget_weather_fixtures.json, read by tests/budget_weather.rs.

rung's weather model (docs/science.md, Weather and allocation): each night of
a month is clear with probability f, independently; a plan of k nights is
repeated night by night until k clear nights are done. The nights scheduled
are k + X with X ~ NegBinom(k, f) (failures before the k-th success), which
is scipy.stats.nbinom(n=k, p=f). The fixture gives, for each (k, f, q), the
q-quantile of k + X (scipy's ppf: the least x with CDF(x) >= q) and the mean
k / f. Where the CDF one night earlier equals q to 1e-9 (an exact tie, as
the median of NegBinom(k, 1/2)), `tie` is true and either answer is right.
Offline; no random numbers.
"""
import json

import numpy as np
import scipy
from scipy.stats import nbinom

CASES = []
for k in [1, 2, 5, 10, 24, 60]:
    for f in [0.3, 0.5, 0.72, 0.9, 0.99]:
        for q in [0.5, 0.75, 0.9, 0.95, 0.99]:
            x = int(nbinom.ppf(q, k, f))
            CASES.append(
                {
                    "k": k,
                    "f": f,
                    "q": q,
                    "nights_quantile": k + x,
                    "nights_mean": k / f,
                    "tie": bool(x > 0 and abs(nbinom.cdf(x - 1, k, f) - q) < 1e-9),
                }
            )

with open("tests/reference/budget_weather_fixtures.json", "w") as fh:
    json.dump(
        {
            "generator": "tests/reference/make_budget_weather_fixtures.py",
            "scipy": scipy.__version__,
            "numpy": np.__version__,
            "cases": CASES,
        },
        fh,
        indent=1,
    )
    fh.write("\n")
print(f"{len(CASES)} cases")
