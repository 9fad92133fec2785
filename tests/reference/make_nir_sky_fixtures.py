#!/usr/bin/env python3
"""Fixture values for the near-infrared sky model (tests/photometry_nir.rs).

From astropy (BlackBody, units): the surface brightness of a black body seen
through the 2MASS J, H, Ks top-hat passbands of config/bands.toml, in mag
arcsec^-2 against each band's zero point, at three temperatures; and the
Cohen, Wheaton & Megeath (2003) zero points in Jansky turned into F_lambda at
the isophotal wavelengths. Offline; run from the repository root:

    python3 tests/reference/make_nir_sky_fixtures.py

writes tests/reference/nir_sky_fixtures.json.
"""
import json

import astropy
import numpy as np
from astropy import units as u
from astropy.modeling.models import BlackBody

# name, lambda_eff (Å), bandwidth (Å), F_lambda(0) (erg s^-1 cm^-2 Å^-1): config/bands.toml
BANDS = [
    ("J", 12350.0, 1620.0, 3.129e-10),
    ("H", 16620.0, 2510.0, 1.133e-10),
    ("K", 21590.0, 2620.0, 4.283e-11),
]
# Cohen, Wheaton & Megeath (2003): zero-magnitude flux densities, Jy (quoted from memory).
JANSKY = {"J": 1594.0, "H": 1024.0, "K": 666.7}
TEMPS_K = [273.15, 283.15, 293.15]

out = {"astropy": astropy.__version__, "numpy": np.__version__, "blackbody_mag_arcsec2": [], "flambda_from_jansky": []}
arcsec2_sr = (1 * u.arcsec**2).to(u.sr).value
for name, lam, width, f0 in BANDS:
    grid = np.linspace(lam - width / 2, lam + width / 2, 20001) * u.AA
    for t in TEMPS_K:
        bb = BlackBody(temperature=t * u.K, scale=1.0 * u.erg / (u.cm**2 * u.s * u.AA * u.sr))
        b = bb(grid).to(u.erg / (u.cm**2 * u.s * u.AA * u.sr)).value
        photons = np.trapezoid(b * grid.value, grid.value) * arcsec2_sr
        zero = f0 * lam * width
        out["blackbody_mag_arcsec2"].append(
            {"band": name, "temperature_k": t, "mag_arcsec2": float(-2.5 * np.log10(photons / zero))}
        )
    fl = (JANSKY[name] * u.Jy).to(u.erg / (u.s * u.cm**2 * u.AA), equivalencies=u.spectral_density(lam * u.AA))
    out["flambda_from_jansky"].append({"band": name, "jansky": JANSKY[name], "flambda_cgs": float(fl.value)})

with open("tests/reference/nir_sky_fixtures.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print(json.dumps(out, indent=1))
