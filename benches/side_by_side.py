#!/usr/bin/env python3
"""Side by side: `rung season` against the straightforward astropy approach.

The astropy side is what an astronomer would write for the same question:
for each night (local noon to local noon) an AltAz frame on a 5-minute grid,
the targets, the Sun and the Moon transformed into it, and a boolean mask
(observed altitude above the limit and the horizon mask, the Sun's centre below
its limit, the Moon farther than its limit), summed to observable hours.

Both run here, one after the other, on the same invented targets, site, nights
and constraints; the script checks that observable hours agree (within 10
minutes, the 5-minute grid's resolution at both window edges) and prints the
speed ratio.

Usage: python3 benches/side_by_side.py [--targets 200] [--nights 30]
Needs the release binary: cargo build --release (or --rung PATH).

With --programme it times instead the jobs an observer runs on a whole
programme, each once, as the command line runs them (nights built afresh):
`rung budget` over 18 months, `rung plan` over 6 months at 8 h a night and
`rung night --targets`, and at the telescope `rung plan` over two weeks
saved, `rung next --plan` on it and the re-plan after a lost night
(`rung plan --load --lost-night --replan`; criterion: benches/schedule.rs),
on synthetic invented programmes of 26, 1,000 and
10,000 targets (`--sizes`), the rows benches/support/synthetic.rs writes for
the criterion benchmark (benches/programme.rs): wall and CPU seconds and peak
memory of each run, with the machine's load average.

With --ui it times the terminal UI in tmux at 80x24 on the same synthetic
programmes (`--sizes`, `--runs` each): until the table shows, until the
rows on screen have their sigma-d/d figures, and from a key to the redrawn
pane while the budget runs (needs tmux).

The season comparison needs numpy and astropy; --programme and --ui do not.
"""

import argparse
import csv
import datetime as dt
import io
import math
import os
import shutil
import subprocess
import sys
import tempfile
import time
from zoneinfo import ZoneInfo

np = iers = u = AltAz = EarthLocation = SkyCoord = get_body = get_sun = Time = None


def load_astropy():
    """numpy and astropy, for the season comparison only (`--programme` and
    `--ui` time rung alone and run without them)."""
    global np, iers, u, AltAz, EarthLocation, SkyCoord, get_body, get_sun, Time
    import numpy as np

    # Offline: never fetch IERS tables; UT1-UTC beyond the bundled table is taken
    # as the table's edge value (rung takes DUT1 = 0; either way < 1 s).
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.iers_degraded_accuracy = "ignore"

    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_body, get_sun
    from astropy.time import Time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)

# The invented demo site, as in config/sites.toml (pampa-lucero).
SITE = dict(
    name="pampa-lucero",
    lat_deg=-27.4521,
    lon_deg=-68.0237,
    elev_m=3120.0,
    tz="America/Argentina/Catamarca",
    temperature_c=6.0,
    humidity=0.25,
    horizon=[(0.0, 5.0), (60.0, 8.0), (110.0, 12.0), (180.0, 4.0), (270.0, 6.0)],
)


def standard_pressure_hpa(elev_m):
    # ICAO/US 1976 troposphere, as rung uses when a site gives no pressure.
    return 1013.25 * (1.0 - 2.25577e-5 * elev_m) ** 5.25588


def invented_targets(n, seed=11):
    rng = np.random.default_rng(seed)
    ra = rng.uniform(0.0, 360.0, n)
    dec = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    names = [f"CMP-{i:04d}" for i in range(n)]
    return names, ra, dec


def local_noon_utc(date, tz):
    t = dt.datetime(date.year, date.month, date.day, 12, 0, tzinfo=ZoneInfo(tz))
    return t.astimezone(dt.timezone.utc)


def horizon_alt(az_deg):
    pts = sorted(SITE["horizon"])
    az = np.array([p[0] for p in pts] + [pts[0][0] + 360.0])
    alt = np.array([p[1] for p in pts] + [pts[0][1]])
    # Wrap below the first point as rung does (linear through north).
    a = np.mod(az_deg, 360.0)
    a = np.where(a < az[0], a + 360.0, a)
    return np.interp(a, az, alt)


def astropy_season(names, ra, dec, dates, min_alt, sun_alt, moon_sep, step_min=5.0):
    loc = EarthLocation.from_geodetic(
        SITE["lon_deg"] * u.deg, SITE["lat_deg"] * u.deg, SITE["elev_m"] * u.m
    )
    stars = SkyCoord(ra=ra * u.deg, dec=dec * u.deg, frame="icrs")
    pressure = standard_pressure_hpa(SITE["elev_m"]) * u.hPa
    hours = {}
    for d in dates:
        t0 = local_noon_utc(d, SITE["tz"])
        t1 = local_noon_utc(d + dt.timedelta(days=1), SITE["tz"])
        n = int(round((t1 - t0).total_seconds() / 60.0 / step_min))
        # Sample the middle of each step, each standing for step_min minutes.
        times = Time(t0) + (np.arange(n) + 0.5) * step_min * u.min
        refr = AltAz(
            obstime=times[:, None],
            location=loc,
            pressure=pressure,
            temperature=SITE["temperature_c"] * u.deg_C,
            relative_humidity=SITE["humidity"],
            obswl=0.55 * u.micron,
        )
        geo = AltAz(obstime=times, location=loc)  # no refraction: geometric
        sun = get_sun(times).transform_to(geo)
        moon = get_body("moon", times, loc).transform_to(geo)
        aa = stars[None, :].transform_to(refr)
        alt = aa.alt.deg
        floor = np.maximum(min_alt, horizon_alt(aa.az.deg))
        ok = (alt >= floor) & (sun.alt.deg < sun_alt)[:, None]
        if moon_sep > 0:
            # Target-Moon separation, topocentric, from the geometric AltAz directions.
            star_geo = stars[None, :].transform_to(AltAz(obstime=times[:, None], location=loc))
            sep = star_geo.separation(moon[:, None]).deg
            ok &= sep >= moon_sep
        h = ok.sum(axis=0) * step_min / 60.0
        for name, x in zip(names, h):
            hours[(name, d.isoformat())] = float(x)
    return hours


def synthetic_programme(n):
    """The CSV of benches/support/synthetic.rs for n targets (same rows)."""
    lines = [
        "# synthetic invented programme (benches/support/synthetic.rs)",
        "name,kind,ra,dec,parallax_mas,pm_ra_masyr,pm_dec_masyr,mag,band,period_d,epoch_max_bjd,"
        "period_err_d,amplitude_mag,mean_mag,discovered,peak_mag,mag_now,redshift,extinction_mag,"
        "goal_pct,priority,notes",
    ]
    golden = 180.0 * (3.0 - math.sqrt(5.0))
    s_lo, s_hi = math.sin(math.radians(-80.0)), math.sin(math.radians(35.0))
    for i in range(n):
        ra = math.fmod(golden * i, 360.0)
        z = s_lo + (s_hi - s_lo) * (i + 0.5) / n
        dec = math.degrees(math.asin(z))
        name = f"SYN-{i:05d}"
        k = i % 13
        if k <= 5:
            row = (f"{name},parallax,{ra:.5f},{dec:.5f},{15 + (i * 37) % 86},{100 + (i * 53) % 400},"
                   f"{-200 + (i * 29) % 400},{12.0 + ((i * 7) % 61) / 10.0:.1f},{'R' if i % 2 == 0 else 'I'},"
                   f",,,,,,,,,,{5 if i % 3 == 0 else 3},1,synthetic (invented)")
        elif k <= 11:
            period = 2.0 * 30.0 ** math.modf(i * 0.618034)[0]
            row = (f"{name},pulsator,{ra:.5f},{dec:.5f},,,,,V,{period:.4f},"
                   f"{2461000.0 + math.fmod(i * 0.37, period):.4f},{period * 2e-5:.6f},"
                   f"{0.4 + (i % 6) / 10.0:.1f},{8.0 + ((i * 11) % 51) / 10.0:.1f},,,,,"
                   f"{0.1 + (i % 9) / 10.0:.2f},{12 if i % 4 == 0 else 3},1,synthetic (invented)")
        else:
            row = (f"{name},transient,{ra:.5f},{dec:.5f},,,,,B,,,,,,2026-11-{20 + i % 10:02d}T06:00:00Z,"
                   f"{15.5 + (i % 25) / 10.0:.1f},,{0.01 + (i % 40) / 1000.0:.3f},0.05,8,2,synthetic (invented)")
        lines.append(row)
    return "\n".join(lines) + "\n"


def write_programme(folder, n):
    """The synthetic programme of `n` targets written into `folder`; its path."""
    path = os.path.join(folder, f"synthetic-{n}.csv")
    with open(path, "w") as f:
        f.write(synthetic_programme(n))
    return path


def timed_run(cmd, env):
    """Run cmd once: (wall s, CPU s, peak resident MB), its output discarded."""
    with open(os.devnull, "wb") as null, tempfile.TemporaryFile() as err:
        t = time.perf_counter()
        p = subprocess.Popen(cmd, stdout=null, stderr=err, env=env)
        _, status, ru = os.wait4(p.pid, 0)
        wall = time.perf_counter() - t
        p.returncode = os.waitstatus_to_exitcode(status)
        if p.returncode not in (0,):
            err.seek(0)
            sys.exit(f"side_by_side: {' '.join(cmd)} failed ({p.returncode}): {err.read().decode()[:500]}")
    return wall, ru.ru_utime + ru.ru_stime, ru.ru_maxrss / 1024.0


def programme_scale(a):
    sizes = [int(x) for x in a.sizes.split(",")]
    print(f"machine: {os.cpu_count()} logical cores, {os.uname().machine}")
    print(f"{'job':<34} {'targets':>8} {'wall s':>8} {'CPU s':>8} {'peak MB':>8} {'load':>5}")
    with tempfile.TemporaryDirectory() as tmp:
        env = dict(os.environ, RUNG_CONFIG_DIR=os.path.join(tmp, "config"), RUNG_NOW="2026-12-02T01:00:00Z")
        os.makedirs(env["RUNG_CONFIG_DIR"])
        for n in sizes:
            path = write_programme(tmp, n)
            site = ["--site", SITE["name"], "--targets", path]
            plan_path = os.path.join(tmp, f"plan-{n}.json")
            jobs = [
                ("budget, 18 months", ["budget", *site, "--from", "2026-12-01", "--to", "2028-05-31", "--json"]),
                ("plan, 6 months, 8 h/night", ["plan", *site, "--from", "2026-12-01", "--to", "2027-05-31",
                                               "--hours-per-night", "8", "--json"]),
                ("night --targets", ["night", *site, "--date", "2026-12-01", "--json"]),
                ("plan, two weeks, 8 h/night, saved", ["plan", *site, "--from", "2026-12-01", "--to", "2026-12-14",
                                                       "--hours-per-night", "8", "--save", plan_path]),
                ("next --plan", ["next", "--plan", plan_path, "--json"]),
                ("re-plan after a lost night", ["plan", "--load", plan_path, "--lost-night", "2026-12-02",
                                                "--replan", "--json"]),
            ]
            for label, args in jobs:
                if a.only and a.only not in label:
                    continue
                load = os.getloadavg()[0]
                wall, cpu, mb = timed_run([a.rung, *args], env)
                print(f"{label:<34} {n:>8} {wall:>8.2f} {cpu:>8.2f} {mb:>8.0f} {load:>5.1f}", flush=True)


def ui_waits(a):
    """The terminal UI at 80x24 in tmux, timed as a person at the keyboard
    sees it: from the start until the pane shows the table (a row of the
    programme), until no row on screen still shows `…` (the sigma-d/d
    column of the rows on screen filled), and for six keys sent from 2 s
    after the start (the rows on screen filled, the budget going on with the
    other rows: the pane does not change on its own then), from the key
    until the pane's text or colours change. The polling of tmux (about
    every 10 ms) is included in every figure."""
    if shutil.which("tmux") is None:
        sys.exit("side_by_side: --ui needs tmux")
    sizes = [int(x) for x in a.sizes.split(",")]
    print(f"machine: {os.cpu_count()} logical cores, {os.uname().machine}")
    print(f"{'targets':>8} {'table s':>8} {'filled s':>9} {'keys ms (Down Down End Home Down Up)':<40} {'load':>5}")
    keys = ["Down", "Down", "End", "Home", "Down", "Up"]
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            path = write_programme(tmp, n)
            for run in range(a.runs):
                sock = f"rung-side-by-side-{os.getpid()}-{n}-{run}"
                cfg = os.path.join(tmp, f"config-{n}-{run}")
                os.makedirs(cfg)
                tmux = ["tmux", "-L", sock]

                def pane(colours=False):
                    args = [*tmux, "capture-pane", "-p", *(["-e"] if colours else []), "-t", "ui"]
                    return subprocess.run(args, capture_output=True, text=True).stdout

                load = os.getloadavg()[0]
                cmd = (f"env RUNG_CONFIG_DIR='{cfg}' RUNG_NOW=2026-12-02T01:00:00Z '{a.rung}' tui "
                       f"--site {SITE['name']} --targets '{path}' --date 2026-12-01")
                t0 = time.perf_counter()
                subprocess.run([*tmux, "new-session", "-d", "-s", "ui", "-x", "80", "-y", "24", cmd], check=True)
                table = filled = None
                try:
                    while time.perf_counter() - t0 < 120:
                        rows = [line for line in pane().splitlines() if "SYN-" in line]
                        now = time.perf_counter() - t0
                        if table is None and rows:
                            table = now
                        if rows and not any("…" in line for line in rows):
                            filled = now
                            break
                        if not rows and subprocess.run([*tmux, "has-session", "-t", "ui"],
                                                       capture_output=True).returncode != 0:
                            break  # rung ended (a message, an error) before its table
                        time.sleep(0.01)
                    if table is None:
                        print(f"{n:>8} the table never showed (rung ended or took over 120 s)", flush=True)
                        continue
                    time.sleep(max(0.0, 2.0 - (time.perf_counter() - t0)))
                    waits = []
                    for k in keys:
                        before = pane(colours=True)
                        t = time.perf_counter()
                        subprocess.run([*tmux, "send-keys", "-t", "ui", k], check=True)
                        while pane(colours=True) == before and time.perf_counter() - t < 5:
                            pass
                        waits.append(1e3 * (time.perf_counter() - t))
                        time.sleep(0.15)
                finally:
                    subprocess.run([*tmux, "kill-server"], capture_output=True)
                ks = " ".join(f"{w:.0f}" for w in waits)
                shown = f"{filled:.2f}" if filled is not None else "-"
                print(f"{n:>8} {table:>8.2f} {shown:>9} {ks:<40} {load:>5.1f}", flush=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--targets", type=int, default=200)
    ap.add_argument("--nights", type=int, default=30)
    ap.add_argument("--from", dest="start", default="2026-03-01")
    ap.add_argument("--min-alt", type=float, default=30.0)
    ap.add_argument("--sun-alt", type=float, default=-18.0)
    ap.add_argument("--moon-sep", type=float, default=30.0)
    ap.add_argument("--rung", default=os.path.join(ROOT, "target", "release", "rung"))
    ap.add_argument("--programme", action="store_true",
                    help="time budget, plan and night on synthetic programmes instead")
    ap.add_argument("--sizes", default="26,1000,10000", help="programme sizes for --programme")
    ap.add_argument("--only", default="", help="with --programme: only the jobs whose label contains this")
    ap.add_argument("--ui", action="store_true",
                    help="time the terminal UI in tmux on synthetic programmes instead (--sizes, --runs)")
    ap.add_argument("--runs", type=int, default=3, help="with --ui: runs at each size")
    a = ap.parse_args()

    if not os.path.exists(a.rung):
        sys.exit(f"side_by_side: {a.rung} not found; build it with `cargo build --release`")
    if a.programme:
        programme_scale(a)
        return
    if a.ui:
        ui_waits(a)
        return
    load_astropy()

    names, ra, dec = invented_targets(a.targets)
    start = dt.date.fromisoformat(a.start)
    dates = [start + dt.timedelta(days=i) for i in range(a.nights)]

    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "targets.csv")
        with open(path, "w") as f:
            f.write("name,kind,ra,dec\n")
            for n_, r_, d_ in zip(names, ra, dec):
                f.write(f"{n_},plain,{r_:.6f},{d_:.6f}\n")
        cmd = [
            a.rung, "season", "--site", SITE["name"], "--targets", path,
            "--from", dates[0].isoformat(), "--to", dates[-1].isoformat(),
            "--min-alt", str(a.min_alt), "--sun-alt", str(a.sun_alt),
            "--moon-sep", str(a.moon_sep), "--csv",
        ]
        # Best of three for rung (its run is short enough for start-up noise to matter).
        rung_s = float("inf")
        for _ in range(3):
            t = time.perf_counter()
            out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
            rung_s = min(rung_s, time.perf_counter() - t)

    rung_h = {}
    for row in csv.DictReader(io.StringIO(out)):
        rung_h[(row["target"], row["night"])] = float(row["observable_hours"])

    t = time.perf_counter()
    astro_h = astropy_season(names, ra, dec, dates, a.min_alt, a.sun_alt, a.moon_sep)
    astro_s = time.perf_counter() - t

    keys = sorted(astro_h)
    missing = [k for k in keys if k not in rung_h]
    if missing:
        sys.exit(f"side_by_side: rung has no row for {len(missing)} target-nights, e.g. {missing[0]}")
    diff_min = np.array([abs(rung_h[k] - astro_h[k]) * 60.0 for k in keys])
    worst = keys[int(np.argmax(diff_min))]
    over10 = int((diff_min > 10.0).sum())

    cpu = os.cpu_count()
    print(f"machine: {cpu} logical cores, {os.uname().machine}, load average {os.getloadavg()[0]:.1f}")
    print(f"workload: {a.targets} targets x {a.nights} nights = {len(keys)} target-nights at {SITE['name']}, "
          f"alt >= {a.min_alt}, Sun < {a.sun_alt}, Moon >= {a.moon_sep} deg")
    print(f"rung season (release, best of 3): {rung_s:8.3f} s wall")
    print(f"astropy AltAz, 5-minute grid:     {astro_s:8.3f} s wall")
    print(f"speed ratio: {astro_s / rung_s:.0f}x")
    print(f"agreement: mean |dhours| {diff_min.mean():.2f} min, worst {diff_min.max():.2f} min "
          f"({worst[0]} on {worst[1]}: rung {rung_h[worst]:.3f} h, astropy {astro_h[worst]:.3f} h), "
          f"{over10} target-nights beyond 10 min")
    if over10 > 0:
        sys.exit("side_by_side: rung and astropy disagree by more than 10 minutes")


if __name__ == "__main__":
    main()
