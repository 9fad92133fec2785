#!/usr/bin/env python3
"""Fixture values for rung's sky model: the Krisciunas & Schaefer (1991, PASP
103, 1033) moonlit-sky model, computed independently of the Rust code with
numpy, written to tests/reference/sky_ks91.json.

The formulas (quoted from memory of the paper, as in the project's science
notes):

  B(nL)   = 34.08 exp(20.7233 - 0.92104 V)              (conversion, eq. 1)
  X(Z)    = (1 - 0.96 sin^2 Z)^-1/2                      (eq. 3)
  B_dark  = B_zen 10^(-0.4 k (X(Z) - 1)) X(Z)            (eq. 2)
  I*      = 10^(-0.4 (3.84 + 0.026 |a| + 4e-9 a^4))      (a: phase angle, deg)
  f(rho)  = 10^5.36 (1.06 + cos^2 rho) + f_M,
            f_M = 10^(6.15 - rho/40) for rho > 10 deg, else 6.2e7 rho^-2
  B_moon  = f(rho) I* 10^(-0.4 k X(Z_m)) [1 - 10^(-0.4 k X(Z))]
  V_sky   = (20.7233 - ln((B_dark + B_moon) / 34.08)) / 0.92104

A second file, tests/reference/sky_geometry.json, puts the model at real
instants: astropy (builtin ephemeris, DUT1 = 0, no refraction) gives the
topocentric altitudes of a target, the Moon and the Sun at the invented
Pampa Lucero site, the Moon-target separation and the Sun-Moon phase angle
seen from the Earth's centre; numpy then evaluates the model above with the
built-in V-band coefficients (k = 0.15, dark zenith V = 21.8, as in
config/bands.toml) for instants with the Sun below -18 deg (no twilight term).

Run from the repository root:  python3 tests/reference/make_sky_fixtures.py
"""

import json
import os

import numpy as np


def nl_from_mag(v):
    return 34.08 * np.exp(20.7233 - 0.92104 * v)


def mag_from_nl(b):
    return (20.7233 - np.log(b / 34.08)) / 0.92104


def x_ks(z_deg):
    return 1.0 / np.sqrt(1.0 - 0.96 * np.sin(np.radians(z_deg)) ** 2)


def moon_nl(alpha_deg, rho_deg, zm_deg, z_deg, k):
    alpha = np.abs(alpha_deg)
    istar = 10.0 ** (-0.4 * (3.84 + 0.026 * alpha + 4e-9 * alpha**4))
    rho = np.abs(rho_deg)
    f_rayleigh = 10.0**5.36 * (1.06 + np.cos(np.radians(rho)) ** 2)
    f_mie = np.where(rho > 10.0, 10.0 ** (6.15 - rho / 40.0), 6.2e7 / np.maximum(rho, 0.25) ** 2)
    b = (f_rayleigh + f_mie) * istar * 10.0 ** (-0.4 * k * x_ks(zm_deg)) * (
        1.0 - 10.0 ** (-0.4 * k * x_ks(z_deg))
    )
    return np.where(zm_deg < 90.0, b, 0.0)


def dark_nl(v_zen, z_deg, k):
    x = x_ks(z_deg)
    return nl_from_mag(v_zen) * 10.0 ** (-0.4 * k * (x - 1.0)) * x


def main():
    rng = np.random.default_rng(19910601)
    # A regular grid through the interesting ranges, including the rho <= 10 deg branch ...
    grid = np.array(
        np.meshgrid(
            [0.0, 30.0, 60.0, 90.0, 120.0, 150.0],  # phase angle, deg
            [5.0, 15.0, 45.0, 90.0, 140.0],  # separation, deg
            [10.0, 45.0, 80.0],  # Moon zenith distance, deg
            [0.0, 40.0, 70.0],  # target zenith distance, deg
            [0.15, 0.25],  # k, mag/airmass
        )
    ).reshape(5, -1).T
    # ... plus random cases over the whole valid domain (Moon up, target up).
    n = 100
    rand = np.column_stack(
        [
            rng.uniform(0.0, 180.0, n),
            rng.uniform(1.0, 179.0, n),
            rng.uniform(0.0, 89.0, n),
            rng.uniform(0.0, 85.0, n),
            rng.uniform(0.05, 0.6, n),
        ]
    )
    cases = np.vstack([grid, rand])
    alpha, rho, zm, z, k = cases.T
    v_zen = np.where(k < 0.2, 21.8, 22.7)
    bm = moon_nl(alpha, rho, zm, z, k)
    bd = dark_nl(v_zen, z, k)
    v = mag_from_nl(bm + bd)
    out = {
        "source": "Krisciunas & Schaefer (1991) PASP 103, 1033, formulas quoted from memory; "
        "computed with numpy by tests/reference/make_sky_fixtures.py",
        "numpy_version": np.__version__,
        "cases": [
            {
                "phase_deg": float(a),
                "sep_deg": float(r),
                "z_moon_deg": float(m),
                "z_deg": float(zz),
                "k": float(kk),
                "dark_zenith_v": float(vz),
                "x_ks": float(x_ks(zz)),
                "b_moon_nl": float(b1),
                "b_dark_nl": float(b2),
                "v_sky": float(vv),
            }
            for a, r, m, zz, kk, vz, b1, b2, vv in zip(alpha, rho, zm, z, k, v_zen, bm, bd, v)
        ],
    }
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "sky_ks91.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")
    print(f"wrote {len(out['cases'])} cases to {path}")
    geometry_fixtures(os.path.dirname(path))


def geometry_fixtures(folder):
    import warnings

    warnings.simplefilter("ignore")
    import astropy
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_body
    from astropy.time import Time
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    # The invented Pampa Lucero Observatory of config/sites.toml.
    loc = EarthLocation.from_geodetic(-68.0237 * u.deg, -27.4521 * u.deg, 3120.0 * u.m)
    targets = [(60.0, -30.0), (100.0, -10.0), (15.0, -60.0), (140.0, 5.0), (30.0, 10.0)]
    times = Time("2026-11-20T00:00:00", scale="utc") + np.arange(0, 45 * 24, 5) * u.hour
    times.delta_ut1_utc = 0.0
    out = []
    for t in times:
        fr = AltAz(obstime=t, location=loc)
        moon = get_body("moon", t, loc)
        sun = get_body("sun", t, loc)
        m = moon.transform_to(fr)
        s = sun.transform_to(fr)
        if s.alt.deg > -18.0 or m.alt.deg < 5.0:
            continue
        mg = get_body("moon", t).cartesian.xyz.to(u.km).value
        sg = get_body("sun", t).cartesian.xyz.to(u.km).value
        a = sg - mg
        b = -mg
        phase = np.degrees(np.arccos(np.dot(a, b) / np.linalg.norm(a) / np.linalg.norm(b)))
        for ra, dec in targets:
            tg = SkyCoord(ra * u.deg, dec * u.deg).transform_to(fr)
            if tg.alt.deg < 20.0:
                continue
            sep = m.separation(tg).deg
            zm, z = 90.0 - m.alt.deg, 90.0 - tg.alt.deg
            bm = moon_nl(np.array(phase), np.array(sep), np.array(zm), np.array(z), 0.15)
            bd = dark_nl(21.8, np.array(z), 0.15)
            out.append(
                {
                    "time": t.isot[:19] + "Z",
                    "ra_deg": ra,
                    "dec_deg": dec,
                    "target_alt_deg": float(tg.alt.deg),
                    "moon_alt_deg": float(m.alt.deg),
                    "sun_alt_deg": float(s.alt.deg),
                    "moon_sep_deg": float(sep),
                    "moon_phase_deg": float(phase),
                    "v_sky": float(mag_from_nl(bm + bd)),
                }
            )
    path = os.path.join(folder, "sky_geometry.json")
    with open(path, "w") as f:
        json.dump(
            {
                "source": "astropy %s (builtin ephemeris, DUT1 = 0, unrefracted) for the geometry; "
                "Krisciunas & Schaefer (1991) in numpy for v_sky (k = 0.15, dark zenith V = 21.8)"
                % astropy.__version__,
                "site": {"lat_deg": -27.4521, "lon_deg": -68.0237, "elev_m": 3120.0},
                "cases": out,
            },
            f,
            indent=1,
        )
        f.write("\n")
    print(f"wrote {len(out)} cases to {path}")


if __name__ == "__main__":
    main()
