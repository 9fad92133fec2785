#!/usr/bin/env python3
"""Reference moonrise/moonset and target rise/transit/set/window fixtures from
astropy, for the two built-in demo sites of config/sites.toml.

Rerun (offline; nothing is downloaded) from the repository root with

    pip install pyerfa astropy numpy      # versions are recorded in the JSON
    python3 tests/reference/make_moon_target_fixtures.py   # about 6 CPU minutes

It writes tests/reference/astropy_moon_targets.json, read by
tests/reference_moon_targets.rs.

Nights (local noon to the next local noon in the site's IANA zone, as rung's
`Night`): every 7th day of 2026 from 2026-01-03 at both sites ("regular", with
the Moon and the targets), plus Moon-only "marginal" nights found on a 10-minute
scan of 2026: every night without a moonrise or without a moonset between the
local noons, and nights whose first moonrise or moonset falls within 20 minutes
of either local noon.

Targets: invented fixed ICRS places (no proper motion, no parallax), eight per
site, with declinations chosen against the site's latitude: circumpolar, just
circumpolar (lowest geometric altitude about 0.6 deg above the rise/set
altitude), setting briefly near lower culmination, near the zenith, equatorial,
rising briefly (highest altitude about 0.6 deg above the rise/set altitude), and
never rising. Their right ascensions are spread round the sky so transits fall
at every hour through the year.

Definitions (the ones rung documents in DEVELOPERS.md, "Events"; restated here
from the conventions they come from, not copied from rung's code):

- moonrise / moonset: the Moon's upper limb on the horizon with a standard
  horizontal refraction of 34': topocentric geometric (pressure 0) altitude of
  the centre + topocentric semidiameter asin(1737.4 km / topocentric distance)
  = -0 deg 34' (Meeus, Astronomical Algorithms, ch. 15, which states the same
  condition as the geocentric altitude h0 = 0.7275 pi - 0 deg 34'; the mean
  lunar radius 1737.4 km is the IAU value). The site's pressure and
  temperature do not enter: the 34' is the conventional horizon refraction.
- target rise / set: topocentric geometric altitude through -0 deg 34'
  (Meeus ch. 15), first rising and first setting crossing between the noons.
- transit: first upper transit, topocentric apparent hour angle (astropy
  HADec, pressure 0) through 0 from east to west.
- window: observed (refracted) altitude at or above max(min_alt, horizon mask
  at the target's azimuth) and the Sun's geometric centre below sun_alt. The
  refraction is astropy's AltAz with the site's pressure (standard atmosphere
  at the site's height, ICAO: 1013.25 (1 - 2.25577e-5 h)^5.25588 hPa),
  temperature and humidity from config/sites.toml, at 0.55 um (astropy calls
  ERFA refco, the model SOFA uses). The horizon mask is linear in azimuth
  between the listed points, wrapping through north (the field's meaning in
  config/sites.toml). Two limits: "default" (30 deg, Sun below -18 deg) and
  "low" (0 deg, Sun below -12 deg: the horizon mask is the floor at
  pampa-lucero). The intervals above the floor and the dark intervals are
  each found on the grid and bisected, then intersected: a window shorter
  than the grid step where the two overlap (a target sinking below the floor
  just after dusk) is found too.
- max_alt: highest observed altitude while the Sun is below sun_alt, the
  largest of the transit (when dark), the dark-interval ends and the 120 s grid
  points in the dark.

Method: astropy on a 120 s grid from local noon to the next local noon brackets
every crossing; each is refined by bisection of astropy's own values to 1 ms.
Times are written as SI seconds after the night's start (its local noon,
"start_jd_utc"), rounded to 1 ms.

Conventions shared with rung (as in make_fixtures.py): UT1 = UTC (DUT1 = 0),
no polar motion (astropy gets an Earth-orientation table of zeros), WGS84
geodetic sites. astropy's built-in ephemeris is used since no JPL file may be
fetched: ERFA epv00 for the Earth and Sun and ERFA moon98 (Meeus's ch. 47
series) for the Moon -- the same lunar theory rung uses, so these fixtures
check rung's topocentric reduction, light time, horizon definitions, event
search and windows, not the lunar theory itself.
"""

import json
import math
import sys
import tomllib
import warnings
from datetime import date, datetime, timedelta, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

import astropy
import astropy.units as u
import erfa
import numpy as np
from astropy.coordinates import AltAz, EarthLocation, HADec, SkyCoord, get_body
from astropy.table import QTable
from astropy.time import Time
from astropy.utils import iers

warnings.simplefilter("ignore")  # ERFA "dubious year" past the leap-second table

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
ROOT = HERE.parent.parent
OUT = "astropy_moon_targets.json"
YEAR = 2026
FIRST = date(2026, 1, 3)
STEP_DAYS = 7
GRID_S = 120.0
BISECT_TOL_S = 1e-3
SCAN_S = 600.0
EDGE_S = 20 * 60.0
WL_UM = 0.55
RISE_SET_DEG = -34.0 / 60.0
MOON_RADIUS_KM = 1737.4
LIMITS = [("default", 30.0, -18.0), ("low", 0.0, -12.0)]

# Invented fixed targets: (name, ra_deg, dec_deg, what the declination is for).
# pampa-lucero, latitude -27.4521: circumpolar beyond |dec| = 61.98 (south),
# never rises beyond dec = +63.12 (north), geometric altitudes against -0 deg 34'.
# sierra-alcaravan, latitude +38.4713: circumpolar beyond dec = +50.96, never
# rises beyond dec = -52.10.
TARGETS = {
    "pampa-lucero": [
        ("ref-pl-1", 12.0, -80.0, "circumpolar"),
        ("ref-pl-2", 57.0, -62.6, "just circumpolar (lowest altitude +0.05 deg)"),
        ("ref-pl-3", 102.0, -61.5, "sets for about 1.5 h near lower culmination"),
        ("ref-pl-4", 147.0, -30.0, "near the zenith (transit altitude 87.5 deg)"),
        ("ref-pl-5", 192.0, 0.0, "equatorial"),
        ("ref-pl-6", 237.0, 40.0, "low in the north"),
        ("ref-pl-7", 282.0, 62.5, "rises for about 1.7 h (highest altitude +0.05 deg)"),
        ("ref-pl-8", 327.0, 64.0, "never rises"),
    ],
    "sierra-alcaravan": [
        ("ref-sa-1", 30.0, 85.0, "circumpolar"),
        ("ref-sa-2", 75.0, 51.6, "just circumpolar (lowest altitude +0.07 deg)"),
        ("ref-sa-3", 120.0, 50.3, "sets for about 1.5 h near lower culmination"),
        ("ref-sa-4", 165.0, 38.0, "near the zenith (transit altitude 89.5 deg)"),
        ("ref-sa-5", 210.0, 0.0, "equatorial"),
        ("ref-sa-6", 255.0, -35.0, "low in the south"),
        ("ref-sa-7", 300.0, -51.5, "rises for about 1.6 h (highest altitude +0.03 deg)"),
        ("ref-sa-8", 345.0, -55.0, "never rises"),
    ],
}

GENERATOR = {
    "script": "tests/reference/make_moon_target_fixtures.py",
    "python": sys.version.split()[0],
    "pyerfa": erfa.__version__,
    "astropy": astropy.__version__,
    "numpy": np.__version__,
    "dut1_s": 0.0,
    "polar_motion": "none (xp = yp = 0)",
    "ephemeris": "astropy builtin (ERFA epv00, ERFA moon98)",
}


def standard_pressure_hpa(elev_m):
    return 1013.25 * max(0.0, 1.0 - 2.25577e-5 * elev_m) ** 5.25588


def load_sites():
    doc = tomllib.loads((ROOT / "config" / "sites.toml").read_text())
    out = []
    for s in doc["site"]:
        out.append({
            "name": s["name"],
            "lat_deg": s["lat_deg"],
            "lon_deg": s["lon_deg"],
            "elev_m": s["elev_m"],
            "timezone": s["timezone"],
            "pressure_hpa": s.get("pressure_hpa", standard_pressure_hpa(s["elev_m"])),
            "temperature_c": s.get("temperature_c", 10.0),
            "humidity": s.get("humidity", 0.5),
            "horizon": sorted([list(p) for p in s.get("horizon", [])]),
        })
    return out


def horizon_alt_deg(horizon, az_deg):
    """Lowest usable altitude at an azimuth: linear between the points, through north."""
    az_deg = np.asarray(az_deg, dtype=float)
    if not horizon:
        return np.zeros_like(az_deg)
    if len(horizon) == 1:
        return np.full_like(az_deg, horizon[0][1])
    az_pts = np.array([p[0] for p in horizon], dtype=float)
    alt_pts = np.array([p[1] for p in horizon], dtype=float)
    # Unroll one turn on each side so np.interp wraps through north.
    xs = np.concatenate([az_pts - 360.0, az_pts, az_pts + 360.0])
    ys = np.concatenate([alt_pts, alt_pts, alt_pts])
    return np.interp(np.mod(az_deg, 360.0), xs, ys)


def local_noon_utc(zone, d):
    return datetime(d.year, d.month, d.day, 12, 0, 0, tzinfo=ZoneInfo(zone)).astimezone(timezone.utc)


def span_of(site, d):
    start = local_noon_utc(site["timezone"], d)
    end = local_noon_utc(site["timezone"], d + timedelta(days=1))
    t0 = Time(start.replace(tzinfo=None).isoformat(), scale="utc")
    return t0, (end - start).total_seconds()


def grid_offsets(span_s, step_s):
    n = int(math.floor(span_s / step_s))
    offs = np.arange(n + 1) * step_s
    if offs[-1] < span_s:
        offs = np.append(offs, span_s)
    return offs


class Sky:
    """astropy positions at one site, vectorised over (time, target) arrays."""

    def __init__(self, site):
        self.site = site
        self.loc = EarthLocation.from_geodetic(
            site["lon_deg"] * u.deg, site["lat_deg"] * u.deg, site["elev_m"] * u.m)

    def altaz(self, times, refracted):
        if refracted:
            return AltAz(obstime=times, location=self.loc,
                         pressure=self.site["pressure_hpa"] * u.hPa,
                         temperature=self.site["temperature_c"] * u.deg_C,
                         relative_humidity=self.site["humidity"],
                         obswl=WL_UM * u.micron)
        return AltAz(obstime=times, location=self.loc, pressure=0 * u.hPa)

    def sun_alt_deg(self, times):
        return get_body("sun", times, self.loc).transform_to(self.altaz(times, False)).alt.deg

    def moon_limb_deg(self, times):
        """Upper-limb altitude (geometric, topocentric) minus -0 deg 34'."""
        m = get_body("moon", times, self.loc).transform_to(self.altaz(times, False))
        sd = np.degrees(np.arcsin(MOON_RADIUS_KM / m.distance.to(u.km).value))
        return m.alt.deg + sd - RISE_SET_DEG

    def star(self, times, ra_deg, dec_deg):
        return SkyCoord(ra=np.asarray(ra_deg) * u.deg, dec=np.asarray(dec_deg) * u.deg, frame="icrs")

    def star_geom_deg(self, times, ra_deg, dec_deg):
        return self.star(times, ra_deg, dec_deg).transform_to(self.altaz(times, False)).alt.deg

    def star_obs(self, times, ra_deg, dec_deg):
        c = self.star(times, ra_deg, dec_deg).transform_to(self.altaz(times, True))
        return c.alt.deg, c.az.deg

    def star_ha_deg(self, times, ra_deg, dec_deg):
        frame = HADec(obstime=times, location=self.loc, pressure=0 * u.hPa)
        ha = self.star(times, ra_deg, dec_deg).transform_to(frame).ha.deg
        return (ha + 180.0) % 360.0 - 180.0

    def above_floor_deg(self, times, ra_deg, dec_deg, min_alt):
        alt, az = self.star_obs(times, ra_deg, dec_deg)
        return alt - np.maximum(min_alt, horizon_alt_deg(self.site["horizon"], az))


class Roots:
    """Brackets of sign changes collected over many nights, bisected together.

    Each kind of function (the Moon's limb, a star's geometric altitude, its
    hour angle, its observed altitude above the window's floor, the Sun
    against a limit) is bisected on
    astropy's own values to BISECT_TOL_S, all brackets of that kind at once.
    """

    def __init__(self, sky):
        self.sky = sky
        self.jobs = {}  # kind -> list of (t0 jd1, t0 jd2, lo_s, hi_s, f_lo, ra, dec)
        self.roots = {}

    def add(self, kind, t0, lo, hi, f_lo, ra=0.0, dec=0.0):
        jobs = self.jobs.setdefault(kind, [])
        jobs.append((t0.jd1, t0.jd2, lo, hi, f_lo, ra, dec))
        return (kind, len(jobs) - 1)

    def fn(self, kind, times, ra, dec):
        sky = self.sky
        if kind == "moon":
            return sky.moon_limb_deg(times)
        if kind == "geom":
            return sky.star_geom_deg(times, ra, dec) - RISE_SET_DEG
        if kind == "ha":
            return sky.star_ha_deg(times, ra, dec)
        what, lname = kind
        _, min_alt, sun_lim = next(x for x in LIMITS if x[0] == lname)
        if what == "dark":
            return sun_lim - sky.sun_alt_deg(times)
        return sky.above_floor_deg(times, ra, dec, min_alt)

    def solve(self):
        for kind, jobs in self.jobs.items():
            a = np.array(jobs, dtype=float)
            t0 = Time(a[:, 0], a[:, 1], format="jd", scale="utc")
            lo, hi, f_lo, ra, dec = a[:, 2], a[:, 3], a[:, 4], a[:, 5], a[:, 6]
            while np.max(hi - lo) > BISECT_TOL_S:
                mid = 0.5 * (lo + hi)
                fm = self.fn(kind, t0 + mid * u.s, ra, dec)
                same = (fm >= 0) == (f_lo >= 0)
                lo = np.where(same, mid, lo)
                f_lo = np.where(same, fm, f_lo)
                hi = np.where(same, hi, mid)
            self.roots[kind] = 0.5 * (lo + hi)
            print(f"  {kind}: {len(jobs)} roots", flush=True)

    def get(self, job):
        return float(self.roots[job[0]][job[1]])


def sign_changes(v):
    """Indices j with a sign change (>= 0 counts as above) between v[j] and v[j+1]."""
    a = v[:-1] >= 0
    b = v[1:] >= 0
    return np.nonzero(a != b)[0]


def crossings(roots, kind, t0, offs, v, ra=0.0, dec=0.0, keep=lambda v, j: True):
    """Queue the sign changes of v (on offs) for bisection: [(job, rising)]."""
    out = []
    for j in sign_changes(v):
        if keep(v, j):
            job = roots.add(kind, t0, offs[j], offs[j + 1], v[j], ra, dec)
            out.append((job, bool(v[j + 1] >= 0)))
    return out


def intervals(roots, cs, first_up, span):
    """Intervals where the function is >= 0, from its crossings and its first value."""
    iv, open_at = [], (0.0 if first_up else None)
    for job, up in cs:
        x = roots.get(job)
        if up:
            open_at = x
        elif open_at is not None:
            iv.append((open_at, x))
            open_at = None
    if open_at is not None:
        iv.append((open_at, span))
    return iv


def intersect(a, b):
    """Overlaps of two time-ordered lists of disjoint intervals."""
    out = []
    for a0, a1 in a:
        for b0, b1 in b:
            lo, hi = max(a0, b0), min(a1, b1)
            if lo < hi:
                out.append((lo, hi))
    return sorted(out)


def moon_scan(sky, days):
    """Moon-only marginal nights: no rise or set, or the first within EDGE_S of a noon."""
    picks = []
    spans = [span_of(sky.site, d) for d in days]
    offs = [grid_offsets(s, SCAN_S) for _, s in spans]
    times = Time(np.concatenate([(t0 + o * u.s).jd for (t0, _), o in zip(spans, offs)]),
                 format="jd", scale="utc")
    v_all = sky.moon_limb_deg(times)
    k = 0
    for d, (t0, span), o in zip(days, spans, offs):
        v = v_all[k:k + len(o)]
        k += len(o)
        js = sign_changes(v)
        rises = [o[j] for j in js if v[j + 1] >= 0]
        sets = [o[j] for j in js if v[j + 1] < 0]
        why = None
        if not rises or not sets:
            why = "moon-null"
        else:
            first = [rises[0], sets[0]]
            if any(x < EDGE_S or span - x < EDGE_S + SCAN_S for x in first):
                why = "moon-edge"
        if why:
            picks.append((d, why))
    return picks


def night_grid(sky, roots, d, kind, with_targets):
    """First pass: astropy on the 120 s grid, every crossing queued for bisection."""
    site = sky.site
    t0, span = span_of(site, d)
    offs = grid_offsets(span, GRID_S)
    times = t0 + offs * u.s
    g = {"site": site["name"], "date": d.isoformat(), "kind": kind, "t0": t0,
         "span": span, "offs": offs}
    v = sky.moon_limb_deg(times)
    g["moon"] = crossings(roots, "moon", t0, offs, v)
    g["moon_range"] = (float(v.min()) + RISE_SET_DEG, float(v.max()) + RISE_SET_DEG)
    if not with_targets:
        return g
    tg = TARGETS[site["name"]]
    # (m, 1) places broadcast against the grid times: one frame for all targets.
    ra = np.array([t[1] for t in tg])[:, None]
    dec = np.array([t[2] for t in tg])[:, None]
    geo = sky.star_geom_deg(times, ra, dec) - RISE_SET_DEG
    ha = sky.star_ha_deg(times, ra, dec)
    alt_obs, az_obs = sky.star_obs(times, ra, dec)
    sun = sky.sun_alt_deg(times)
    floor_mask = horizon_alt_deg(site["horizon"], az_obs)
    g["sun"] = sun
    g["alt_obs"] = alt_obs
    g["dark"] = {}
    for lname, _, sun_lim in LIMITS:
        sv = sun_lim - sun
        g["dark"][lname] = (crossings(roots, ("dark", lname), t0, offs, sv), bool(sv[0] >= 0))
    g["targets"] = []
    for i, (name, r, dc, _) in enumerate(tg):
        t = {"name": name, "ra": r, "dec": dc,
             "geom_range": (float(geo[i].min()) + RISE_SET_DEG, float(geo[i].max()) + RISE_SET_DEG),
             "rise_set": crossings(roots, "geom", t0, offs, geo[i], r, dc),
             # Upper transit: hour angle from negative to positive, not the jump at 180 deg.
             "transit": crossings(roots, "ha", t0, offs, ha[i], r, dc,
                                  keep=lambda v, j: v[j] < 0 <= v[j + 1] and v[j + 1] - v[j] < 90.0),
             "windows": {}}
        for lname, min_alt, _ in LIMITS:
            av = alt_obs[i] - np.maximum(min_alt, floor_mask[i])
            t["windows"][lname] = (crossings(roots, ("above", lname), t0, offs, av, r, dc),
                                   bool(av[0] >= 0))
        g["targets"].append(t)
    return g


def r3(x):
    return None if x is None else round(float(x), 3)


def night_record(sky, roots, g):
    """Second pass: the bisected roots into the night's fixture record."""
    rec = {"site": g["site"], "date": g["date"], "kind": g["kind"],
           "start_jd_utc": float(g["t0"].jd1 + g["t0"].jd2), "span_s": g["span"]}
    rs = [roots.get(j) for j, up in g["moon"] if up]
    ss = [roots.get(j) for j, up in g["moon"] if not up]
    rec["moonrise_s"] = r3(rs[0]) if rs else None
    rec["moonset_s"] = r3(ss[0]) if ss else None
    rec["moon_rises"] = len(rs)
    rec["moon_sets"] = len(ss)
    rec["moon_limb_min_deg"] = round(g["moon_range"][0], 4)
    rec["moon_limb_max_deg"] = round(g["moon_range"][1], 4)
    if "targets" not in g:
        return rec
    span, t0, sun = g["span"], g["t0"], g["sun"]
    dark = {lname: intervals(roots, cs, up, span) for lname, (cs, up) in g["dark"].items()}
    out = []
    for i, t in enumerate(g["targets"]):
        rise = next((roots.get(j) for j, up in t["rise_set"] if up), None)
        set_ = next((roots.get(j) for j, up in t["rise_set"] if not up), None)
        transit = next((roots.get(j) for j, _ in t["transit"]), None)
        row = {"name": t["name"], "rise_s": r3(rise), "set_s": r3(set_),
               "transit_s": r3(transit),
               "geom_min_deg": round(t["geom_range"][0], 4),
               "geom_max_deg": round(t["geom_range"][1], 4)}
        # Candidates for the highest altitude in the dark: the transit, the ends
        # of every dark interval (of any limit; filtered below) and the grid.
        cand = ([transit] if transit is not None else []) + \
            [x for iv in dark.values() for ab in iv for x in ab]
        ct = t0 + np.array(cand) * u.s
        c_alt, _ = sky.star_obs(ct, np.full(len(cand), t["ra"]), np.full(len(cand), t["dec"]))
        c_sun = sky.sun_alt_deg(ct)
        for lname, _, sun_lim in LIMITS:
            cs, up = t["windows"][lname]
            above = intervals(roots, cs, up, span)
            row[f"windows_{lname}"] = [[r3(a), r3(b)] for a, b in intersect(above, dark[lname])]
            in_dark = sun < sun_lim
            best = float(g["alt_obs"][i][in_dark].max()) if in_dark.any() else None
            edges = [x for ab in dark[lname] for x in ab]
            for x, a, s in zip(cand, c_alt, c_sun):
                # The ends of this limit's dark intervals count as dark; others by the Sun.
                if x in edges or s < sun_lim:
                    best = float(a) if best is None else max(best, float(a))
            row[f"max_alt_{lname}_deg"] = None if best is None else round(best, 5)
        out.append(row)
    rec["targets"] = out
    return rec


def main():
    sites = load_sites()
    days = [date(YEAR, 1, 1) + timedelta(days=k) for k in range(365)]
    regular = [FIRST + timedelta(days=k) for k in range(0, 365, STEP_DAYS)
               if (FIRST + timedelta(days=k)).year == YEAR]
    nights = []
    for site in sites:
        sky = Sky(site)
        marginal = [(d, why) for d, why in moon_scan(sky, days) if d not in regular]
        print(f"{site['name']}: {len(regular)} regular nights, {len(marginal)} marginal "
              f"Moon nights", flush=True)
        roots = Roots(sky)
        grids = [night_grid(sky, roots, d, "regular", True) for d in regular]
        grids += [night_grid(sky, roots, d, why, False) for d, why in marginal]
        print(f"{site['name']}: grids done", flush=True)
        roots.solve()
        nights += [night_record(sky, roots, g) for g in grids]
        print(f"{site['name']} done", flush=True)
    targets = {s: [{"name": n, "ra_deg": ra, "dec_deg": dec, "note": note}
                   for n, ra, dec, note in tg] for s, tg in TARGETS.items()}
    doc = {
        "generator": GENERATOR,
        "source": "astropy get_body('moon') / SkyCoord(ICRS) -> AltAz (pressure 0 for rise, "
                  "set and the Moon; site pressure, temperature, humidity at 0.55 um for "
                  "windows) and HADec (pressure 0) on a 120 s grid from local noon to local "
                  "noon, crossings bisected on astropy's values to 1 ms",
        "grid_s": GRID_S,
        "bisection_tol_s": BISECT_TOL_S,
        "rise_set_deg": RISE_SET_DEG,
        "moon_radius_km": MOON_RADIUS_KM,
        "definitions": {
            "moonrise": "first rising crossing of upper-limb topocentric geometric altitude "
                        "(centre + asin(R_moon / topocentric distance)) through -0 deg 34'",
            "moonset": "first setting crossing of the same",
            "rise": "first rising crossing of topocentric geometric altitude through -0 deg 34'",
            "set": "first setting crossing of the same",
            "transit": "first hour angle crossing from negative to positive (pressure 0)",
            "windows": "observed altitude >= max(min_alt, horizon mask at azimuth) and Sun "
                       "geometric centre < sun_alt; [start_s, end_s] pairs",
            "max_alt": "highest observed altitude while the Sun is below sun_alt",
            "times": "SI seconds after start_jd_utc (local noon of date), rounded to 1 ms",
        },
        "limits": [{"name": n, "min_alt_deg": a, "sun_alt_deg": s} for n, a, s in LIMITS],
        "sites": sites,
        "targets": targets,
        "nights": nights,
    }
    path = HERE / OUT
    path.write_text(json.dumps(doc, indent=0, separators=(",", ":")) + "\n")
    print(f"wrote {path} ({path.stat().st_size} bytes, {len(nights)} nights)")


if __name__ == "__main__":
    main()
