#!/usr/bin/env python3
"""Fixture values for the parallax tests (tests/parallax_*.rs).

Run from the repository root:  python3 tests/reference/make_parallax_fixtures.py
Writes tests/reference/parallax_fixtures.json.

Sources (open reference libraries from PyPI):
- pyerfa (ERFA, the BSD-licensed SOFA derivative): erfa.epv00 for the Earth's
  barycentric position at TT, erfa.pmpx for the ICRS -> astrometric direction
  with and without parallax. The displacement between the two, projected on the
  tangent plane at the catalogue place, is what rung's parallax factors must
  reproduce: (dx, dy) = parallax * (P_ra, P_dec).
- numpy: an independent weighted least-squares solution (QR of the whitened
  design matrix) for (x0, y0, mu_x, mu_y, parallax), whose covariance rung's
  Cholesky solution must match.

The star positions are invented test directions, not real objects.
"""
import json
import os

import erfa
import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
MAS_PER_RAD = 180.0 / np.pi * 3600e3


def tangent(u, ra, dec):
    """Gnomonic (tangent-plane) coordinates of unit vector u about (ra, dec), radians."""
    u0 = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
    east = np.array([-np.sin(ra), np.cos(ra), 0.0])
    north = np.array([-np.sin(dec) * np.cos(ra), -np.sin(dec) * np.sin(ra), np.cos(dec)])
    d = u @ u0
    return (u @ east) / d, (u @ north) / d


def displacement_mas(ra, dec, px_arcsec, pob):
    """Parallactic displacement (mas) from ERFA pmpx, with minus without parallax."""
    u1 = erfa.pmpx(ra, dec, 0.0, 0.0, px_arcsec, 0.0, 0.0, pob)
    u0 = erfa.pmpx(ra, dec, 0.0, 0.0, 0.0, 0.0, 0.0, pob)
    x1, y1 = tangent(u1, ra, dec)
    x0, y0 = tangent(u0, ra, dec)
    return (x1 - x0) * MAS_PER_RAD, (y1 - y0) * MAS_PER_RAD


def factor_cases():
    stars = [(12.0, -31.2), (61.3, -18.4), (131.6, -71.3), (189.7, -27.6),
             (250.3, 52.0), (334.1, -1.3), (270.0, 66.56), (90.0, 0.0), (5.0, 85.0)]
    dates = [(2026, 12, 1.9), (2027, 3, 21.1), (2027, 6, 20.5), (2027, 9, 23.3), (2028, 2, 29.0)]
    out = []
    for ra_deg, dec_deg in stars:
        ra, dec = np.radians(ra_deg), np.radians(dec_deg)
        for y, m, d in dates:
            tt1, tt2 = erfa.cal2jd(y, m, int(d))
            tt2 += d - int(d)
            _, pvb = erfa.epv00(tt1, tt2)
            pob = np.asarray(pvb["p"], dtype=float).reshape(3)
            # Linear response: the displacement for 1 mas, scaled to 1 arcsec.
            lx, ly = displacement_mas(ra, dec, 1e-3, pob)
            # Direct: the displacement for 1 arcsec (includes the second-order term).
            dx, dy = displacement_mas(ra, dec, 1.0, pob)
            out.append({
                "ra_deg": ra_deg, "dec_deg": dec_deg, "tt1": tt1, "tt2": tt2,
                "earth_bary_au": pob.tolist(),
                "linear_disp_ra_mas_per_arcsec": lx * 1e3,
                "linear_disp_dec_mas_per_arcsec": ly * 1e3,
                "direct_disp_ra_mas": dx, "direct_disp_dec_mas": dy,
            })
    return out


def factors(ra, dec, tt1, tt2):
    _, pvb = erfa.epv00(tt1, tt2)
    x, y, z = np.asarray(pvb["p"], dtype=float).reshape(3)
    return (x * np.sin(ra) - y * np.cos(ra),
            x * np.cos(ra) * np.sin(dec) + y * np.sin(ra) * np.sin(dec) - z * np.cos(dec))


def lsq_case(name, ra_deg, dec_deg, jds, sigmas):
    ra, dec = np.radians(ra_deg), np.radians(dec_deg)
    epochs = []
    for jd, s in zip(jds, sigmas):
        pa, pd = factors(ra, dec, jd, 0.0)
        epochs.append({"t_yr": float(erfa.epj(jd, 0.0)), "pf_ra": float(pa), "pf_dec": float(pd), "sigma_mas": s})
    t = np.array([e["t_yr"] for e in epochs])
    tbar = t.mean()
    rows, w = [], []
    for e in epochs:
        dt = e["t_yr"] - tbar
        rows.append([1, 0, dt, 0, e["pf_ra"]])
        rows.append([0, 1, 0, dt, e["pf_dec"]])
        w += [1 / e["sigma_mas"], 1 / e["sigma_mas"]]
    a = np.array(rows, dtype=float) * np.array(w)[:, None]
    _, r = np.linalg.qr(a)
    rinv = np.linalg.inv(r)
    cov = rinv @ rinv.T
    sd = np.sqrt(np.diag(cov))
    return {
        "name": name, "ra_deg": ra_deg, "dec_deg": dec_deg, "epochs": epochs,
        "covariance": cov.tolist(),
        "sigma_parallax_mas": sd[4], "sigma_pm_ra_masyr": sd[2], "sigma_pm_dec_masyr": sd[3],
        "corr_parallax_pm_ra": cov[4, 2] / (sd[4] * sd[2]),
        "corr_parallax_pm_dec": cov[4, 3] / (sd[4] * sd[3]),
    }


def lsq_cases():
    j0 = 2461376.5  # 2026-12-15 0h
    rng = np.random.default_rng(20261201)
    # Three years, two seasons a year, four epochs per season, mixed errors.
    multi = []
    for yr in range(3):
        for centre in (30.0, 210.0):
            for k in range(4):
                multi.append(j0 + 365.25 * yr + centre + 12.0 * k + rng.uniform(-2, 2))
    sig_multi = [float(v) for v in rng.uniform(2.5, 6.0, len(multi))]
    # One season: eight epochs over three months.
    single = [j0 + 10.0 * k for k in range(8)]
    sig_single = [4.0] * len(single)
    return [
        lsq_case("three_years_two_seasons", 61.3, -18.4, multi, sig_multi),
        lsq_case("one_season", 61.3, -18.4, single, sig_single),
    ]


def main():
    data = {
        "generator": "tests/reference/make_parallax_fixtures.py",
        "pyerfa": erfa.__version__,
        "numpy": np.__version__,
        "factors": factor_cases(),
        "lsq": lsq_cases(),
    }
    path = os.path.join(HERE, "parallax_fixtures.json")
    with open(path, "w") as f:
        json.dump(data, f, indent=1)
        f.write("\n")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
