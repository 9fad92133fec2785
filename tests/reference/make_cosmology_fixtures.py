"""Luminosity distances of flat ΛCDM universes, from astropy's cosmology.

Usage (from the repository root):  python3 tests/reference/make_cosmology_fixtures.py
Writes tests/reference/cosmology_fixtures.json, read by tests/transient_cosmology.rs.

For each (H0, Ωm) pair and redshift: astropy.cosmology.FlatLambdaCDM with
Tcmb0 = 0 (no radiation, as rung's model; astropy then uses its closed
form in hypergeometric functions, from scipy), luminosity_distance in Mpc,
comoving_distance in Mpc and distmod in mag. Offline; no random numbers.
"""
import json

import astropy
import numpy as np
import scipy
from astropy.cosmology import FlatLambdaCDM

MODELS = [(70.0, 0.3), (67.4, 0.315), (73.0, 0.334), (60.0, 0.0), (80.0, 1.0)]
REDSHIFTS = [0.001, 0.0135, 0.021, 0.026, 0.05, 0.08, 0.1, 0.15, 0.3, 0.5, 1.0, 2.0, 3.0]

cases = []
for h0, om in MODELS:
    c = FlatLambdaCDM(H0=h0, Om0=om, Tcmb0=0.0)
    for z in REDSHIFTS:
        cases.append(
            {
                "h0_km_s_mpc": h0,
                "omega_m": om,
                "z": z,
                "luminosity_distance_mpc": float(c.luminosity_distance(z).value),
                "comoving_distance_mpc": float(c.comoving_distance(z).value),
                "distance_modulus_mag": float(c.distmod(z).value),
            }
        )

out = {
    "generator": "tests/reference/make_cosmology_fixtures.py",
    "astropy": astropy.__version__,
    "numpy": np.__version__,
    "scipy": scipy.__version__,
    "model": "FlatLambdaCDM(H0, Om0, Tcmb0=0)",
    "cases": cases,
}
with open("tests/reference/cosmology_fixtures.json", "w") as f:
    json.dump(out, f, indent=1)
print(f"wrote {len(cases)} cases")
