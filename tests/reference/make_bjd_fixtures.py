"""BJD_TDB reference values for rung's barycentric correction, from astropy.

Usage (from the repository root):  python3 tests/reference/make_bjd_fixtures.py
Writes tests/reference/bjd_fixtures.json, read by tests/pulsator_bary.rs.

For each case: an invented site and target (ICRS, no space motion), a UTC
instant, astropy's barycentric light-travel-time correction
Time.light_travel_time(coord, 'barycentric', location=...) with its default
'builtin' ephemeris (ERFA epv00), DUT1 = 0 (delta_ut1_utc = 0), offline
(iers.conf.auto_download = False; polar motion falls back to 0 beyond the
bundled IERS table), and the TDB of the instant at that location.
"""
import json
import warnings

import astropy
import erfa
import numpy as np
from astropy import units as u
from astropy.coordinates import EarthLocation, SkyCoord
from astropy.time import Time
from astropy.utils import iers

iers.conf.auto_download = False
iers.conf.auto_max_age = None
iers.conf.iers_degraded_accuracy = "warn"
warnings.simplefilter("ignore")

SITES = [
    # invented sites (the demo observatory and two others)
    ("pampa-lucero", -27.4521, -68.0237, 3120.0),
    ("sierra-alcaravan", 38.4713, -4.1622, 1710.0),
    ("equator-test", 0.5, 100.0, 50.0),
]
TARGETS = [
    # invented directions spread over the sky, one on the ecliptic, one at the ecliptic pole
    (5.8, -12.4),
    (90.0, 23.4393),
    (150.3, -47.1),
    (270.0, 66.5607),
    (233.4, -9.6),
]
INSTANTS = [
    "1999-07-01T03:00:00",
    "2016-12-31T23:59:59",
    "2024-03-20T12:00:00",
    "2026-06-15T04:30:00",
    "2026-12-01T23:15:00",
    "2031-09-10T08:00:00",
    "2045-01-15T00:00:00",
]

cases = []
k = 0
for iso in INSTANTS:
    for si, (sname, lat, lon, h) in enumerate(SITES):
        ra, dec = TARGETS[k % len(TARGETS)]
        k += 1
        loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, h * u.m)
        t = Time(iso, scale="utc", location=loc)
        t.delta_ut1_utc = 0.0
        c = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
        ltt = t.light_travel_time(c, "barycentric", location=loc)
        tdb = t.tdb
        bjd = tdb + ltt
        cases.append(
            {
                "site": sname,
                "lat_deg": lat,
                "lon_deg": lon,
                "elev_m": h,
                "ra_deg": ra,
                "dec_deg": dec,
                "utc": iso + "Z",
                "ltt_s": float(ltt.to_value(u.s)),
                "tdb_jd1": float(tdb.jd1),
                "tdb_jd2": float(tdb.jd2),
                "bjd_tdb_jd1": float(bjd.jd1),
                "bjd_tdb_jd2": float(bjd.jd2),
            }
        )

out = {
    "generator": "tests/reference/make_bjd_fixtures.py",
    "astropy": astropy.__version__,
    "pyerfa": erfa.__version__,
    "numpy": np.__version__,
    "notes": "Time.light_travel_time(coord, 'barycentric', location=loc), builtin ephemeris (epv00), DUT1 = 0, offline IERS",
    "cases": cases,
}
with open("tests/reference/bjd_fixtures.json", "w") as f:
    json.dump(out, f, indent=1)
print(f"wrote {len(cases)} cases")
