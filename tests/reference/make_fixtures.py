#!/usr/bin/env python3
"""Reference fixtures for rung's integration tests, from open libraries on PyPI.

Rerun (offline; nothing is downloaded) from the repository root with

    pip install pyerfa astropy numpy      # versions below made the committed files
    python3 tests/reference/make_fixtures.py

The committed fixtures were made with pyerfa 2.0.1.5, astropy 8.0.2 and
numpy 2.4.6 (Python 3.11); each JSON file also records the versions that wrote
it, under "generator".

It writes three files beside itself:

- erfa_observed.json: observed and geometric (pressure 0) azimuth and altitude
  from ERFA apco13 + atciq + atioq for random (site, instant, target) cases.
- astropy_sun_moon.json: topocentric geometric Sun and Moon altitudes
  (astropy get_body + AltAz with pressure 0) and the Moon's illuminated fraction
  from the geocentric Sun-Moon elongation (k = (1 + cos i)/2, Meeus ch. 48).
- astropy_events.json: sunset/sunrise (Sun's geometric centre at -0 deg 50')
  and civil/nautical/astronomical dusk and dawn (-6, -12, -18 deg) for a set of
  sites, on the 21st of every month of 2026 and on the nights when the Sun's
  lowest or highest altitude comes within 0.2 deg of a threshold at the sites
  beyond 50 deg latitude (found on a 10-minute scan of the year), found here on
  a 1-minute grid of astropy Sun altitudes and refined by interpolation.

Conventions shared with rung: UT1 = UTC (DUT1 = 0), no polar motion (astropy is
given an Earth-orientation table of zeros), WGS84 geodetic sites, wavelength
0.55 um for refraction, pressure from the standard atmosphere at the site's
height (ICAO: 1013.25 (1 - 2.25577e-5 h)^5.25588 hPa) unless stated.
astropy uses its built-in ephemeris (ERFA epv00 for the Earth and Sun, Meeus's
ch. 47 series for the Moon) since no JPL file may be fetched here.
"""

import json
import math
import sys
import warnings
from datetime import datetime, timedelta, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

import erfa
import numpy as np
import astropy
import astropy.units as u
from astropy.coordinates import AltAz, EarthLocation, get_body
from astropy.table import QTable
from astropy.time import Time
from astropy.utils import iers

warnings.simplefilter("ignore")  # ERFA "dubious year" for instants past the leap-second table

iers.conf.auto_download = False
iers.conf.auto_max_age = None
_mjd = np.arange(30000.0, 80000.0, 10.0)
_z = np.zeros_like(_mjd)
iers.earth_orientation_table.set(
    iers.IERS_B(
        QTable(
            {
                "MJD": _mjd * u.d,
                "UT1_UTC": _z * u.s,
                "PM_x": _z * u.arcsec,
                "PM_y": _z * u.arcsec,
                "dX_2000A": _z * u.arcsec,
                "dY_2000A": _z * u.arcsec,
            }
        )
    )
)

HERE = Path(__file__).resolve().parent
SEED = 20261201
WL_UM = 0.55
GENERATOR = {
    "script": "tests/reference/make_fixtures.py",
    "python": sys.version.split()[0],
    "pyerfa": erfa.__version__,
    "astropy": astropy.__version__,
    "numpy": np.__version__,
    "seed": SEED,
    "dut1_s": 0.0,
    "polar_motion": "none (xp = yp = 0)",
}


def standard_pressure_hpa(elev_m):
    return 1013.25 * max(0.0, 1.0 - 2.25577e-5 * elev_m) ** 5.25588


def utc_parts(jd):
    """Two-part UTC Julian date: 0h of the day and the fraction."""
    whole = math.floor(jd - 0.5) + 0.5
    return whole, jd - whole


def write(name, obj):
    path = HERE / name
    path.write_text(json.dumps(obj, indent=0, separators=(",", ":")) + "\n")
    print(f"wrote {path} ({path.stat().st_size} bytes)")


# ---------------------------------------------------------------- ERFA ----


def apco13(utc1, utc2, site, phpa):
    astrom, eo = erfa.apco13(
        utc1, utc2, 0.0, math.radians(site["lon_deg"]), math.radians(site["lat_deg"]),
        site["elev_m"], 0.0, 0.0, phpa, site["temperature_c"], site["humidity"], WL_UM,
    )
    return astrom  # pyerfa raises on an error status


def observe(astrom, t):
    ri, di = erfa.atciq(t["ra_rad"], t["dec_rad"], t["pm_ra_rad_yr"], t["pm_dec_rad_yr"],
                        t["parallax_arcsec"], t["rv_kms"], astrom)
    aob, zob, hob, dob, rob = erfa.atioq(ri, di, astrom)
    return float(aob), float(math.pi / 2 - zob)


def place_at(astrom_geo, az_deg, alt_deg):
    """ICRS place (no space motion) that appears at a given geometric az/alt."""
    ri, di = erfa.atoiq("A", math.radians(az_deg), math.radians(90.0 - alt_deg), astrom_geo)
    rc, dc = erfa.aticq(ri, di, astrom_geo)
    return float(rc), float(dc)


def erfa_cases(rng, n=240):
    jd_1990 = 2447892.5
    jd_2060 = 2473459.5
    cases = []
    kinds = ["uniform", "pole", "horizon", "motion"]
    for i in range(n):
        kind = kinds[i % 4]
        lat = float(rng.uniform(-80.0, 80.0))
        if i % 2 == 0:
            lat = -abs(lat)  # both hemispheres, equally
        else:
            lat = abs(lat)
        site = {
            "lat_deg": lat,
            "lon_deg": float(rng.uniform(-180.0, 180.0)),
            "elev_m": float(rng.uniform(0.0, 4500.0)),
            "temperature_c": float(rng.uniform(-15.0, 25.0)),
            "humidity": float(rng.uniform(0.05, 0.95)),
        }
        site["pressure_hpa"] = standard_pressure_hpa(site["elev_m"])
        jd = float(rng.uniform(jd_1990, jd_2060))
        utc1, utc2 = utc_parts(jd)
        a_geo = apco13(utc1, utc2, site, 0.0)
        tgt = {"pm_ra_rad_yr": 0.0, "pm_dec_rad_yr": 0.0, "parallax_arcsec": 0.0, "rv_kms": 0.0}
        if kind == "uniform":
            tgt["ra_rad"] = float(rng.uniform(0, 2 * math.pi))
            tgt["dec_rad"] = float(math.asin(rng.uniform(-1, 1)))
        elif kind == "pole":
            sign = 1.0 if rng.uniform() < 0.5 else -1.0
            tgt["ra_rad"] = float(rng.uniform(0, 2 * math.pi))
            tgt["dec_rad"] = sign * math.radians(90.0 - rng.uniform(0.0, 1.5))
        elif kind == "horizon":
            # Geometric altitude from -1 to +3 deg at a random azimuth.
            tgt["ra_rad"], tgt["dec_rad"] = place_at(
                a_geo, float(rng.uniform(0, 360)), float(rng.uniform(-1.0, 3.0)))
        else:
            # Nearby stars: proper motion up to 2"/yr in each axis, parallax up to 0.8".
            tgt["ra_rad"] = float(rng.uniform(0, 2 * math.pi))
            tgt["dec_rad"] = float(math.asin(rng.uniform(-1, 1)))
            cd = math.cos(tgt["dec_rad"])
            mas = math.radians(1e-3 / 3600.0)
            tgt["pm_ra_rad_yr"] = float(rng.uniform(-2000, 2000)) * mas / cd
            tgt["pm_dec_rad_yr"] = float(rng.uniform(-2000, 2000)) * mas
            tgt["parallax_arcsec"] = float(rng.uniform(0.0, 0.8))
            tgt["rv_kms"] = float(rng.uniform(-80, 80))
        a_obs = apco13(utc1, utc2, site, site["pressure_hpa"])
        az_g, alt_g = observe(a_geo, tgt)
        az_o, alt_o = observe(a_obs, tgt)
        cases.append({
            "kind": kind, "site": site, "utc1": utc1, "utc2": utc2, "target": tgt,
            "az_geom_rad": az_g, "alt_geom_rad": alt_g,
            "az_obs_rad": az_o, "alt_obs_rad": alt_o,
        })
    return cases


# ------------------------------------------------------------- astropy ----


def location(lat_deg, lon_deg, elev_m):
    return EarthLocation.from_geodetic(lon_deg * u.deg, lat_deg * u.deg, elev_m * u.m)


def sun_alt_deg(times, loc):
    frame = AltAz(obstime=times, location=loc, pressure=0 * u.hPa)
    return get_body("sun", times, loc).transform_to(frame).alt.deg


def sun_moon_cases(rng, n=150):
    jd_1990 = 2447892.5
    jd_2060 = 2473459.5
    cases = []
    for i in range(n):
        lat = float(rng.uniform(-80.0, 80.0))
        lat = -abs(lat) if i % 2 == 0 else abs(lat)
        lon = float(rng.uniform(-180.0, 180.0))
        elev = float(rng.uniform(0.0, 4500.0))
        jd = float(rng.uniform(jd_1990, jd_2060))
        utc1, utc2 = utc_parts(jd)
        t = Time(utc1, utc2, format="jd", scale="utc")
        loc = location(lat, lon, elev)
        frame = AltAz(obstime=t, location=loc, pressure=0 * u.hPa)
        sun = get_body("sun", t, loc).transform_to(frame)
        moon = get_body("moon", t, loc).transform_to(frame)
        # Geocentric Sun and Moon for the phase.
        sg = get_body("sun", t)
        mg = get_body("moon", t)
        psi = sg.separation(mg).rad
        r_sun = sg.distance.to(u.km).value
        r_moon = mg.distance.to(u.km).value
        i_phase = math.atan2(r_sun * math.sin(psi), r_moon - r_sun * math.cos(psi))
        k = (1 + math.cos(i_phase)) / 2
        cases.append({
            "site": {"lat_deg": lat, "lon_deg": lon, "elev_m": elev},
            "utc1": utc1, "utc2": utc2,
            "sun_alt_deg": float(sun.alt.deg), "sun_az_deg": float(sun.az.deg),
            "moon_alt_deg": float(moon.alt.deg), "moon_az_deg": float(moon.az.deg),
            "moon_elongation_deg": math.degrees(psi),
            "moon_phase_angle_deg": math.degrees(i_phase),
            "moon_illumination": k,
        })
    return cases


EVENT_SITES = [
    # name, lat, lon, elev_m, IANA zone (invented places at these coordinates)
    ("s60", -60.0, -45.0, 10.0, "Etc/GMT+3"),
    ("s45", -45.0, 170.0, 300.0, "Pacific/Auckland"),
    ("s33", -33.0, -70.5, 1500.0, "America/Santiago"),
    ("s20", -20.0, 30.0, 1200.0, "Africa/Harare"),
    ("n00", 0.0, -78.0, 2800.0, "America/Guayaquil"),
    ("n12", 12.0, 77.0, 900.0, "Asia/Kolkata"),
    ("n28", 28.0, -17.0, 2400.0, "Atlantic/Canary"),
    ("n40", 40.0, -105.0, 1600.0, "America/Denver"),
    ("n52", 52.0, 5.0, 0.0, "Europe/Amsterdam"),
    ("n60", 60.0, 25.0, 50.0, "Europe/Helsinki"),
    ("n66", 66.0, -18.0, 20.0, "Atlantic/Reykjavik"),
    ("n70", 70.0, 19.0, 30.0, "Europe/Oslo"),
]
THRESHOLDS = [
    ("sunset", "sunrise", -50.0 / 60.0),
    ("civil_dusk", "civil_dawn", -6.0),
    ("nautical_dusk", "nautical_dawn", -12.0),
    ("astronomical_dusk", "astronomical_dawn", -18.0),
]
YEAR = 2026
DAY = 21
GRID_S = 60.0


def local_noon_utc(zone, y, m, d):
    dt = datetime(y, m, d, 12, 0, 0, tzinfo=ZoneInfo(zone))
    return dt.astimezone(timezone.utc)


def cubic_root(ts, vs, j):
    """Root of the cubic through 4 grid points around the sign change in [j, j+1]."""
    lo = max(0, min(j - 1, len(ts) - 4))
    x = ts[lo:lo + 4]
    y = vs[lo:lo + 4]

    def p(t):
        s = 0.0
        for a in range(4):
            w = 1.0
            for b in range(4):
                if a != b:
                    w *= (t - x[b]) / (x[a] - x[b])
            s += w * y[a]
        return s

    a, b = ts[j], ts[j + 1]
    fa = p(a)
    for _ in range(60):
        mid = 0.5 * (a + b)
        fm = p(mid)
        if (fm < 0) == (fa < 0):
            a, fa = mid, fm
        else:
            b = mid
    return 0.5 * (a + b)


def marginal_dates(max_extra=36, margin_deg=0.2):
    """Dates of YEAR at the high-latitude sites when the Sun's lowest (or highest)
    altitude of the night comes within `margin_deg` of an event threshold: the
    hard cases where an event only just happens or only just fails to happen."""
    picks = []
    for name, lat, lon, elev, zone in EVENT_SITES:
        if abs(lat) < 50:
            continue
        loc = location(lat, lon, elev)
        d0 = datetime(YEAR, 1, 1)
        days = [d0 + timedelta(days=k) for k in range(365)]
        starts = [local_noon_utc(zone, d.year, d.month, d.day) for d in days]
        offs = np.arange(0, 86400 + 1, 600.0)
        t0 = Time([st.replace(tzinfo=None).isoformat() for st in starts], scale="utc")
        times = t0[:, None] + offs[None, :] * u.s
        alt = sun_alt_deg(times, loc).reshape(len(days), len(offs))
        for k, d in enumerate(days):
            for extreme in (alt[k].min(), alt[k].max()):
                for _, _, thr in THRESHOLDS:
                    if abs(extreme - thr) < margin_deg and d.day != DAY:
                        picks.append((abs(extreme - thr), name, d.month, d.day))
    picks.sort()
    out = []
    for _, n, m, d in picks:
        if (n, m, d) not in out:
            out.append((n, m, d))
    return out[:max_extra]


def event_nights():
    nights = []
    extra = marginal_dates()
    print(f"marginal nights: {extra}", flush=True)
    for name, lat, lon, elev, zone in EVENT_SITES:
        loc = location(lat, lon, elev)
        dates = [(month, DAY) for month in range(1, 13)]
        dates += [(m, d) for n, m, d in extra if n == name]
        for month, day in dates:
            start = local_noon_utc(zone, YEAR, month, day)
            nd = datetime(YEAR, month, day) + timedelta(days=1)
            end = local_noon_utc(zone, nd.year, nd.month, nd.day)
            span = (end - start).total_seconds()
            n = int(math.floor(span / GRID_S))
            offs = np.arange(n + 1) * GRID_S
            if offs[-1] < span:
                offs = np.append(offs, span)
            t0 = Time(start.replace(tzinfo=None).isoformat(), scale="utc")
            times = t0 + offs * u.s
            alt = sun_alt_deg(times, loc)
            night = {"site": name, "date": f"{YEAR}-{month:02d}-{day:02d}",
                     "marginal": day != DAY,
                     "start_jd_utc": float(t0.jd1 + t0.jd2),
                     "sun_alt_min_deg": float(alt.min()), "sun_alt_max_deg": float(alt.max())}
            roots = []
            for dusk_key, dawn_key, thr in THRESHOLDS:
                v = alt - thr
                cross = []
                for j in range(len(v) - 1):
                    if (v[j] < 0) != (v[j + 1] < 0):
                        cross.append((cubic_root(offs, v, j), bool(v[j + 1] >= 0)))
                falls = [c[0] for c in cross if not c[1]]
                dusk = falls[0] if falls else None
                rises = [c[0] for c in cross if c[1] and (dusk is None or c[0] > dusk)]
                dawn = rises[-1] if rises else None
                night[dusk_key] = dusk
                night[dawn_key] = dawn
                night[dusk_key + "_crossings"] = len(cross)
                for key, val in ((dusk_key, dusk), (dawn_key, dawn)):
                    if val is not None:
                        roots.append((key, val, thr))
            # Check the refined roots against astropy itself.
            if roots:
                rt = t0 + np.array([r[1] for r in roots]) * u.s
                ra = sun_alt_deg(rt, loc)
                worst = max(abs(a - r[2]) for a, r in zip(ra, roots))
                if worst > 2e-4:
                    raise RuntimeError(f"{name} {night['date']}: root residual {worst} deg")
                night["root_residual_max_deg"] = float(worst)
            # Offsets (s from local noon) to UTC JDs.
            for dusk_key, dawn_key, _ in THRESHOLDS:
                for key in (dusk_key, dawn_key):
                    val = night[key]
                    night[key] = None if val is None else float(t0.jd1 + t0.jd2 + val / 86400.0)
                    if val is not None:
                        night[key + "_iso"] = (t0 + val * u.s).isot
            nights.append(night)
        print(f"events: {name} done", flush=True)
    sites = [{"name": s[0], "lat_deg": s[1], "lon_deg": s[2], "elev_m": s[3], "timezone": s[4]}
             for s in EVENT_SITES]
    return sites, nights


def main():
    rng = np.random.default_rng(SEED)
    write("erfa_observed.json", {
        "generator": GENERATOR,
        "source": "ERFA (pyerfa) apco13 + atciq + atioq; geometric = pressure 0",
        "wavelength_um": WL_UM,
        "cases": erfa_cases(rng),
    })
    write("astropy_sun_moon.json", {
        "generator": GENERATOR,
        "source": "astropy get_body('sun'/'moon', location) -> AltAz(pressure=0); "
                  "illumination from geocentric elongation, Meeus eq. 48.2/48.3 and 48.1",
        "cases": sun_moon_cases(rng),
    })
    sites, nights = event_nights()
    write("astropy_events.json", {
        "generator": GENERATOR,
        "source": "astropy Sun AltAz(pressure=0) on a 60 s grid from local noon to next "
                  "local noon, roots by cubic interpolation, checked against astropy",
        "grid_s": GRID_S,
        "thresholds_deg": {k[0]: k[2] for k in THRESHOLDS},
        "definition": "dusk = first falling crossing after local noon; dawn = last rising "
                      "crossing after dusk (or in the span when there is no dusk)",
        "sites": sites,
        "nights": nights,
    })


if __name__ == "__main__":
    main()
