//! Season scan: for every target and every night of a date range, the
//! observable hours, best airmass, transit and the closest Moon inside the
//! observable window — fast enough for tens of thousands of targets over years.
//!
//! How it stays cheap (the structure of the problem):
//! - Per night, one [`NightFrame`] (interpolated SOFA astrometry, as
//!   `rung::astro::night::Night` uses it: Sun on a 10-minute grid, Sun limits
//!   refined to 1 ms; Moon on a [`MOON_STEP_S`] grid) and one full SOFA context
//!   (`apco13`) at the middle of the night are shared by every target.
//! - Per target and night, the apparent (CIRS) place is computed once with
//!   SOFA `atciq` at the middle of the night. Over one night it moves by well
//!   under 1″ (aberration and precession-nutation change slowly), so the hour
//!   angle is linear in time at the sidereal (Earth rotation angle) rate, and the
//!   geometric altitude follows the closed form of spherical astronomy
//!   sin h = sin φ sin δ + cos φ cos δ cos H (e.g. Meeus, *Astronomical
//!   Algorithms*, 2nd ed., eq. 13.6). The hour-angle interval above a
//!   geometric altitude is then exact: |H| ≤ arccos((sin h − sin φ sin δ)/(cos φ cos δ)).
//! - Refraction: the observed-altitude limit is turned into the geometric
//!   altitude that SOFA `atioq` refracts onto it, from a table of SOFA `atioq`
//!   refraction (with the site's `refco` constants) built once per scan.
//! - A horizon mask above the altitude limit is applied by sampling every
//!   [`MASK_STEP_S`] seconds inside the window and refining each crossing.
//! - The Moon is carried on its grid as unit vectors in a
//!   frame that turns with the Earth, so target–Moon separation is a dot product
//!   per grid point, linear in between; the Moon limit crossings and the
//!   minimum separation come from that piecewise-linear curve.
//! - Targets are spread over all cores with rayon; rows are handed to a sink
//!   one night at a time, so memory does not grow with targets × nights.
//!
//! Accuracy: observable hours agree with the full SOFA chain at 1-minute steps
//! to within the 1-minute resolution of that reference (tests/season_accuracy.rs).

use crate::astro::airmass::kasten_young;
use crate::astro::events::{grid, positive_intervals};
use crate::astro::frames::CatalogPlace;
use crate::astro::frames::{NightFrame, Observed};
use crate::astro::night::{EVENT_TOL_S, GRID_STEP_S, Limits, local_noon};
use crate::astro::site::Site;
use crate::astro::time::{DUT1_S, Instant, UNIX_EPOCH_JD};
use crate::astro::visibility::{push_merged, sampled_into};
use crate::error::{Result, RungError};
use chrono::{Datelike, NaiveDate};
use rayon::prelude::*;
use sofars::astro::{IauAstrom, ab, apco13, ldsun, pmpx};
use std::f64::consts::{PI, TAU};
use std::ops::ControlFlow;

/// Longest date range one scan accepts, days (ten years).
pub const MAX_SPAN_DAYS: i64 = 3653;

/// Sampling step of the horizon mask inside a window, seconds (the
/// visibility table's); crossings are then refined to [`MASK_TOL_S`]. Mask
/// features narrower than this in time (a few arcminutes of azimuth near the
/// meridian) can be missed.
pub use crate::astro::visibility::MASK_STEP_S;
/// Tolerance of horizon-mask crossings, seconds (regula falsi,
/// `astro::visibility::sampled_into`).
pub const MASK_TOL_S: f64 = 0.01;

/// Earth rotation rate, radians per UT1 second (see `astro::visibility`).
pub use crate::astro::visibility::ERA_RATE_RAD_S;

/// Spacing of the Moon's grid, seconds. Linear interpolation of the Moon's
/// direction over it errs by < 0.003° (the topocentric parallax, ≤ 1°, turns
/// by 7.5° in 30 minutes: 1° × (0.13 rad)²/8 ≈ 0.002°).
pub const MOON_STEP_S: f64 = 1800.0;

/// Targets per parallel work item.
const CHUNK: usize = 256;

/// Sun altitude (degrees) above which the Sun counts as up for the Sun-avoidance
/// caution (the sunrise/sunset altitude).
const SUN_UP_DEG: f64 = crate::astro::SUN_UP_DEG;

/// The observing constraints of a season scan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Constraints {
    /// Minimum observed (refracted) altitude, degrees.
    pub min_alt_deg: f64,
    /// The Sun's centre must be below this geometric altitude, degrees.
    pub sun_alt_deg: f64,
    /// Minimum target–Moon separation (topocentric, centre of the Moon), degrees; 0 for none.
    pub moon_sep_deg: f64,
}

impl Constraints {
    /// Checked constraints: altitude −1..89°, Sun −90..0°, Moon separation 0..180°.
    pub fn new(min_alt_deg: f64, sun_alt_deg: f64, moon_sep_deg: Option<f64>) -> Result<Self> {
        let l = Limits::new(min_alt_deg, sun_alt_deg)?;
        let m = moon_sep_deg.unwrap_or(0.0);
        if !m.is_finite() || !(0.0..=180.0).contains(&m) {
            return Err(RungError::invalid(
                "--moon-sep",
                format!("{m} is not within 0..180 degrees"),
            ));
        }
        Ok(Constraints {
            min_alt_deg: l.min_alt_deg,
            sun_alt_deg: l.sun_alt_deg,
            moon_sep_deg: m,
        })
    }
}

/// Check a date range for a scan: `from` not after `to`, at most
/// [`MAX_SPAN_DAYS`] nights, and inside rung's valid span. Returns the nights.
pub fn nights_in(from: NaiveDate, to: NaiveDate) -> Result<Vec<NaiveDate>> {
    if from > to {
        return Err(RungError::invalid(
            "date range",
            format!("--from {from} is after --to {to}"),
        ));
    }
    let n = (to - from).num_days() + 1;
    if n > MAX_SPAN_DAYS {
        return Err(RungError::invalid(
            "date range",
            format!(
                "{from} to {to} is {n} nights; a season scan covers at most {MAX_SPAN_DAYS} nights (10 years)"
            ),
        ));
    }
    for d in [from, to] {
        crate::astro::time::parse_date(&d.to_string())?;
    }
    Ok(from.iter_days().take(n as usize).collect())
}

/// SOFA's refraction tabulated once per site (see `astro::visibility`).
pub use crate::astro::visibility::Refraction;

/// What one night offers every target: the dark intervals, the shared
/// astrometry at its middle, and the Moon (and Sun, when needed) on a grid.
#[derive(Debug, Clone)]
pub struct NightSky {
    /// The local date whose evening starts the night.
    pub date: NaiveDate,
    /// Middle of the local-noon-to-noon span; every offset is from here, SI seconds.
    pub mid: Instant,
    /// Start of the night (local noon), seconds from `mid`.
    pub start_s: f64,
    /// End of the night (next local noon), seconds from `mid`.
    pub end_s: f64,
    /// Intervals with the Sun's centre below the Sun limit, seconds from `mid`.
    pub dark_s: Vec<(f64, f64)>,
    /// Illuminated fraction of the Moon at `mid`.
    pub moon_illumination: f64,
    astrom: IauAstrom,
    grid_s: Vec<f64>,
    moon_s0: f64,
    moon_h: f64,
    moon_v: Vec<[f64; 3]>,
    moon_c: [f64; 3],
    moon_cap_cos: f64,
    cos_eral: f64,
    sin_eral: f64,
    sun_v: Vec<[f64; 3]>,
    sun_up: Vec<bool>,
}

/// Unit vector of an (hour angle, declination) taken back to the night's middle
/// along the Earth's rotation, so that fixed stars are fixed vectors.
fn turning_unit(ha_rad: f64, dec_rad: f64, s: f64) -> [f64; 3] {
    let psi = ha_rad - ERA_RATE_RAD_S * s;
    let (sp, cp) = psi.sin_cos();
    let (sd, cd) = dec_rad.sin_cos();
    [cd * cp, cd * sp, sd]
}

impl NightSky {
    /// Prepare the night of `date` at `site` for the constraints `c`.
    pub fn new(site: &Site, date: NaiveDate, c: &Constraints) -> Result<Self> {
        // The night's span and Sun as `Night` has them (local noon to local noon,
        // Sun on the 10-minute grid, limits refined to 1 ms), with the Moon on a
        // coarser grid: its direction is smooth enough for linear interpolation
        // over MOON_STEP_S (< 0.003°, see the module note).
        let start = local_noon(site, date)?;
        let next = date
            .succ_opt()
            .ok_or_else(|| RungError::invalid("date", "no next day"))?;
        let end = local_noon(site, next)?;
        let frame = NightFrame::new(site, start.add_seconds(-1800.0), end.add_seconds(1800.0))?;
        let times = grid(start, end, GRID_STEP_S);
        let sun: Vec<Observed> = times.iter().map(|t| frame.context(*t).sun()).collect();
        let sun_alt_deg: Vec<f64> = sun.iter().map(|o| o.alt_geom_rad.to_degrees()).collect();
        let span = end.seconds_since(&start);
        let mid = start.add_seconds(span / 2.0);
        let start_s = start.seconds_since(&mid);
        let end_s = end.seconds_since(&mid);
        let vs: Vec<f64> = sun_alt_deg.iter().map(|a| c.sun_alt_deg - a).collect();
        let mut f = |t: Instant| c.sun_alt_deg - frame.context(t).sun().alt_geom_rad.to_degrees();
        let dark_s = positive_intervals(&mut f, &times, &vs, EVENT_TOL_S)
            .iter()
            .map(|(a, b)| (a.seconds_since(&mid), b.seconds_since(&mid)))
            .filter(|(a, b)| b > a)
            .collect();
        let n_moon = (span / MOON_STEP_S).ceil().max(1.0) as usize;
        let moon_h = span / n_moon as f64;
        let moon_v: Vec<[f64; 3]> = (0..=n_moon)
            .map(|k| {
                let off = start_s + k as f64 * moon_h;
                let o = frame.context(mid.add_seconds(off)).moon();
                turning_unit(o.ha_rad, o.dec_rad, off)
            })
            .collect();
        let moon_illumination = frame.context(mid).moon_illumination();
        let mut astrom = IauAstrom::default();
        let mut eo = 0.0;
        apco13(
            mid.utc1,
            mid.utc2,
            DUT1_S,
            site.lon_rad(),
            site.lat_rad(),
            site.elev_m,
            0.0,
            0.0,
            site.pressure_hpa(),
            site.temperature_c,
            site.humidity,
            crate::astro::frames::REFRACTION_WL_UM,
            &mut astrom,
            &mut eo,
        )
        .map_err(|status| RungError::Sofa {
            routine: "apco13",
            status,
        })?;
        let grid_s: Vec<f64> = times.iter().map(|t| t.seconds_since(&mid)).collect();
        let sun_v = sun
            .iter()
            .zip(&grid_s)
            .map(|(o, s)| turning_unit(o.ha_rad, o.dec_rad, *s))
            .collect();
        let sun_up = sun_alt_deg.iter().map(|a| *a > SUN_UP_DEG).collect();
        // The cap holding the Moon all night: centre and angular radius.
        let mut sum = [0.0; 3];
        for m in &moon_v {
            for (si, mi) in sum.iter_mut().zip(m) {
                *si += mi;
            }
        }
        let n = (sum[0] * sum[0] + sum[1] * sum[1] + sum[2] * sum[2])
            .sqrt()
            .max(1e-300);
        let moon_c = [sum[0] / n, sum[1] / n, sum[2] / n];
        let moon_rho = moon_v
            .iter()
            .map(|m| crate::astro::frames::sep_unit(m, &moon_c))
            .fold(0.0, f64::max);
        Ok(NightSky {
            date,
            mid,
            start_s,
            end_s,
            dark_s,
            moon_illumination,
            astrom,
            grid_s,
            moon_s0: start_s,
            moon_h,
            moon_v,
            moon_c,
            // Targets closer to the cap than the Moon limit plus 0.5° get the
            // fine Moon check; all others cannot meet the limit.
            moon_cap_cos: if c.moon_sep_deg > 0.0 {
                (c.moon_sep_deg.to_radians() + moon_rho + 0.5f64.to_radians())
                    .min(PI)
                    .cos()
            } else {
                2.0
            },
            cos_eral: astrom.eral.cos(),
            sin_eral: astrom.eral.sin(),
            sun_v,
            sun_up,
        })
    }

    /// Hours with the Sun below the limit this night.
    pub fn dark_hours(&self) -> f64 {
        self.dark_s.iter().map(|(a, b)| b - a).sum::<f64>() / 3600.0
    }

    /// The instant `offset_s` seconds from the middle of the night.
    pub fn instant(&self, offset_s: f64) -> Instant {
        self.mid.add_seconds(offset_s)
    }

    /// Unix time (seconds since 1970-01-01T00:00:00 UTC, leap seconds not
    /// counted) of the middle of the night; add an offset for a quick clock time
    /// (off by at most 1 s on a night that holds a leap second).
    pub fn mid_unix_s(&self) -> f64 {
        ((self.mid.utc1 - UNIX_EPOCH_JD) + self.mid.utc2) * 86_400.0
    }
}

/// One target on one night.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct TargetNightRow {
    /// Index of the target in the scanned list.
    pub target: usize,
    /// Observable time: above the altitude limit and the horizon mask, Sun below
    /// its limit, Moon farther than its limit; hours.
    pub observable_hours: f64,
    /// Highest observed altitude inside the observable window, degrees.
    pub max_altitude_deg: Option<f64>,
    /// Kasten–Young airmass at that altitude.
    pub best_airmass: Option<f64>,
    /// Smallest target–Moon separation inside the observable window, degrees.
    pub moon_separation_min_deg: Option<f64>,
    /// Upper transit (first between the local noons), seconds from the night's middle.
    pub transit_s: Option<f64>,
    /// Observed altitude at upper transit, degrees (negative when below the horizon).
    pub transit_altitude_deg: f64,
    /// Start of the first observable interval, seconds from the night's middle.
    pub window_start_s: Option<f64>,
    /// End of the last observable interval, seconds from the night's middle.
    pub window_end_s: Option<f64>,
    /// Number of separate observable intervals.
    pub windows: u8,
    /// The window holds moments with the Sun up and the target within the
    /// site's Sun-avoidance angle (possible only with a Sun limit above −0°50′).
    pub sun_caution: bool,
}

/// The rows of one night, as handed to the sink.
#[derive(Debug, Clone, Copy)]
pub struct NightRows<'a> {
    /// Index of the night in the range (0 for `from`).
    pub index: usize,
    /// Number of nights in the range.
    pub nights: usize,
    /// The night.
    pub sky: &'a NightSky,
    /// One row per target, in the order of the target list.
    pub rows: &'a [TargetNightRow],
}

/// Everything of a scan that does not change from night to night.
#[derive(Debug, Clone)]
pub struct ScanSetup {
    c: Constraints,
    sin_phi: f64,
    cos_phi: f64,
    phi: f64,
    g_lim: f64,
    sin_g_lim: f64,
    refr: std::sync::Arc<Refraction>,
    mask: Option<Site>,
    sin_g_mask: f64,
    cos_moon: f64,
    cos_avoid: f64,
    caution_possible: bool,
}

impl ScanSetup {
    /// Setup for a site and constraints; `sky` provides the refraction constants.
    pub fn new(site: &Site, c: &Constraints, sky: &NightSky) -> Self {
        let refr = Refraction::shared(&sky.astrom);
        let g_lim = refr.geometric(c.min_alt_deg.to_radians());
        let mask_max = site
            .horizon
            .iter()
            .map(|h| h.alt_deg)
            .fold(f64::NEG_INFINITY, f64::max);
        let phi = site.lat_rad();
        ScanSetup {
            c: *c,
            sin_phi: phi.sin(),
            cos_phi: phi.cos(),
            phi,
            g_lim,
            sin_g_lim: g_lim.sin(),
            mask: (mask_max > c.min_alt_deg).then(|| site.clone()),
            sin_g_mask: refr.geometric(mask_max.max(-1.0).to_radians()).sin(),
            refr,
            cos_moon: if c.moon_sep_deg > 0.0 {
                c.moon_sep_deg.to_radians().cos()
            } else {
                f64::INFINITY
            },
            cos_avoid: site.sun_avoid_deg.to_radians().cos(),
            caution_possible: c.sun_alt_deg > SUN_UP_DEG,
        }
    }

    /// The refraction table in use.
    pub fn refraction(&self) -> &Refraction {
        &self.refr
    }

    /// Geometric altitude (degrees) that refracts onto the observed altitude limit.
    pub fn geometric_limit_deg(&self) -> f64 {
        self.g_lim.to_degrees()
    }
}

/// Reusable per-thread buffers.
#[derive(Debug, Default)]
pub struct Scratch {
    a: Vec<(f64, f64)>,
    b: Vec<(f64, f64)>,
}

fn intersect_into(out: &mut Vec<(f64, f64)>, x: (f64, f64), ys: &[(f64, f64)]) {
    for y in ys {
        let lo = x.0.max(y.0);
        let hi = x.1.min(y.1);
        if hi > lo {
            out.push((lo, hi));
        }
    }
}

/// A catalogue place made ready for many nights (its BCRS direction cached
/// when it has no space motion).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PreparedPlace {
    place: CatalogPlace,
    pco: Option<[f64; 3]>,
}

impl PreparedPlace {
    /// Prepare a place.
    pub fn new(place: &CatalogPlace) -> Self {
        let still = place.pm_ra_rad_yr == 0.0
            && place.pm_dec_rad_yr == 0.0
            && place.parallax_arcsec == 0.0
            && place.rv_kms == 0.0;
        PreparedPlace {
            place: *place,
            pco: still.then(|| sofars::vm::s2c(place.ra_rad, place.dec_rad)),
        }
    }
}

/// Compute one target on one night; the result follows [`TargetNightRow`].
///
/// The apparent place is SOFA's `atciq` chain (`pmpx`, `ldsun`, `ab`, `bpn`
/// rotation) at the middle of the night, kept as a CIRS unit vector. Accuracy:
/// the window edges follow the full SOFA chain to a few seconds (Sun limit to
/// 1 ms by regula falsi, altitude limit exact in closed form, horizon mask to
/// [`MASK_TOL_S`], Moon limit from the [`MOON_STEP_S`] grid, linear in between).
pub fn target_night(
    setup: &ScanSetup,
    sky: &NightSky,
    index: usize,
    prepared: &PreparedPlace,
    scratch: &mut Scratch,
) -> TargetNightRow {
    let astrom = &sky.astrom;
    let p = &prepared.place;
    let pco = match prepared.pco {
        Some(v) => v,
        None => pmpx(
            p.ra_rad,
            p.dec_rad,
            p.pm_ra_rad_yr,
            p.pm_dec_rad_yr,
            p.parallax_arcsec,
            p.rv_kms,
            astrom.pmt,
            astrom.eb,
        ),
    };
    let pnat = ldsun(pco, astrom.eh, astrom.em);
    let ppr = ab(&pnat, &astrom.v, astrom.em, astrom.bm1);
    let mut pi = [0.0; 3];
    sofars::vm::rxp(&astrom.bpn, &ppr, &mut pi);
    // CIRS vector turned to (HA, Dec) at the middle of the night: H = ERA_local − RA.
    let (ce, se) = (sky.cos_eral, sky.sin_eral);
    let u = [ce * pi[0] + se * pi[1], se * pi[0] - ce * pi[1], pi[2]];
    let ha_mid = u[1].atan2(u[0]);
    let cd = (u[0] * u[0] + u[1] * u[1]).sqrt();
    let sd = u[2];
    let a = setup.sin_phi * sd;
    let b = setup.cos_phi * cd;
    let w = ERA_RATE_RAD_S;

    // Upper transit: H = 0 ⇒ s = (2πk − H_mid)/ω, the first inside the night.
    let transit_s = (-1..=1)
        .map(|k| (TAU * k as f64 - ha_mid) / w)
        .find(|s| *s >= sky.start_s && *s < sky.end_s);
    let transit_geo = (a + b).clamp(-1.0, 1.0).asin();
    let transit_altitude_deg = setup.refr.observed(transit_geo).to_degrees();

    let mut row = TargetNightRow {
        target: index,
        transit_s,
        transit_altitude_deg,
        ..Default::default()
    };

    // Hour-angle interval above the geometric altitude limit.
    let Scratch { a: cur, b: nxt } = scratch;
    cur.clear();
    let cosh0 = if b.abs() < 1e-12 {
        if a >= setup.sin_g_lim { -2.0 } else { 2.0 }
    } else {
        (setup.sin_g_lim - a) / b
    };
    if cosh0 > 1.0 {
        return row;
    }
    if cosh0 <= -1.0 {
        for d in &sky.dark_s {
            cur.push(*d);
        }
    } else {
        let h0 = cosh0.acos();
        for k in -1..=1 {
            let c = (TAU * k as f64 - ha_mid) / w;
            let up = ((c - h0 / w).max(sky.start_s), (c + h0 / w).min(sky.end_s));
            if up.1 > up.0 {
                intersect_into(cur, up, &sky.dark_s);
            }
        }
    }
    if cur.is_empty() {
        return row;
    }

    let sin_alt_at = |s: f64| -> f64 { a + b * (ha_mid + w * s).cos() };

    // Horizon mask above the altitude limit: sample and refine.
    if let Some(site) = &setup.mask {
        let di = sd.atan2(cd);
        let margin = |s: f64| -> f64 {
            let h = ha_mid + w * s;
            let [az, el] = sofars::coords::hd2ae(h, di, setup.phi);
            let obs = setup.refr.observed(el).to_degrees();
            obs - site
                .horizon_alt_deg(az.to_degrees())
                .max(setup.c.min_alt_deg)
        };
        // Where the target stands above the highest point of the mask the
        // mask cannot bite (closed form again); sample only the rest.
        let c1 = if b.abs() < 1e-12 {
            if a >= setup.sin_g_mask { -2.0 } else { 2.0 }
        } else {
            (setup.sin_g_mask - a) / b
        };
        let mut safe = [(0.0, 0.0); 3];
        let mut n_safe = 0;
        if c1 <= -1.0 {
            safe[0] = (f64::NEG_INFINITY, f64::INFINITY);
            n_safe = 1;
        } else if c1 < 1.0 {
            let h1 = c1.acos();
            for k in -1..=1 {
                let c = (TAU * k as f64 - ha_mid) / w;
                safe[n_safe] = (c - h1 / w, c + h1 / w);
                n_safe += 1;
            }
        }
        nxt.clear();
        for &(lo, hi) in cur.iter() {
            let mut x = lo;
            for &(sa, sb) in &safe[..n_safe] {
                let (sa, sb) = (sa.max(lo), sb.min(hi));
                if sb <= sa || sb <= x {
                    continue;
                }
                if sa > x {
                    sampled_into(&margin, x, sa, MASK_STEP_S, MASK_TOL_S, nxt);
                }
                push_merged(nxt, (sa.max(x), sb));
                x = sb;
            }
            if hi > x {
                sampled_into(&margin, x, hi, MASK_STEP_S, MASK_TOL_S, nxt);
            }
        }
        std::mem::swap(cur, nxt);
        if cur.is_empty() {
            return row;
        }
    }

    // Moon: piecewise-linear cosine of the separation on the Moon grid
    // (every point when the target may come within the limit, every second
    // otherwise, where only the closest approach is wanted); keep the parts
    // farther than the limit and track the closest approach there.
    let mc = &sky.moon_c;
    let fine = u[0] * mc[0] + u[1] * mc[1] + u[2] * mc[2] > sky.moon_cap_cos;
    let cm = if fine { setup.cos_moon } else { f64::INFINITY };
    let stride = if fine { 1 } else { 2 };
    let last = sky.moon_v.len() - 1;
    let nseg = last.div_ceil(stride).max(1);
    let g0 = sky.moon_s0;
    let gh = sky.moon_h;
    let idx = |j: usize| (j * stride).min(last);
    let sx = |j: usize| g0 + idx(j) as f64 * gh;
    let dotm = |j: usize| -> f64 {
        let m = &sky.moon_v[idx(j)];
        u[0] * m[0] + u[1] * m[1] + u[2] * m[2]
    };
    let seg_h = gh * stride as f64;
    let mut max_dot = f64::NEG_INFINITY;
    nxt.clear();
    for &(lo, hi) in cur.iter() {
        let mut j = (((lo - g0) / seg_h).floor().max(0.0) as usize).min(nseg - 1);
        let (mut xa, mut xb) = (sx(j), sx(j + 1));
        let mut dk = dotm(j);
        let mut dk1 = dotm(j + 1);
        let mut slope = if xb > xa { (dk1 - dk) / (xb - xa) } else { 0.0 };
        let mut x0 = lo;
        let mut d0 = dk + slope * (x0 - xa);
        let mut open = if d0 <= cm { Some(x0) } else { None };
        if d0 <= cm {
            max_dot = max_dot.max(d0);
        }
        loop {
            let at_end = j + 1 >= nseg || xb >= hi;
            let x1 = if at_end { hi.max(x0) } else { xb };
            let d1 = if at_end { dk + slope * (x1 - xa) } else { dk1 };
            if (d0 <= cm) != (d1 <= cm) {
                let xc = x0 + (cm - d0) / (d1 - d0) * (x1 - x0);
                max_dot = max_dot.max(cm);
                if d1 <= cm {
                    open = Some(xc);
                } else if let Some(o) = open.take() {
                    nxt.push((o, xc));
                }
            }
            if d1 <= cm {
                max_dot = max_dot.max(d1);
            }
            if at_end {
                break;
            }
            x0 = x1;
            d0 = d1;
            j += 1;
            xa = xb;
            xb = sx(j + 1);
            dk = dk1;
            dk1 = dotm(j + 1);
            slope = if xb > xa { (dk1 - dk) / (xb - xa) } else { 0.0 };
        }
        if let Some(o) = open {
            nxt.push((o, hi));
        }
    }
    std::mem::swap(cur, nxt);
    if cur.is_empty() {
        return row;
    }

    // Totals, the highest altitude and the Sun caution.
    let mut total_s = 0.0;
    let mut best_sin = f64::NEG_INFINITY;
    for &(lo, hi) in cur.iter() {
        total_s += hi - lo;
        let h_lo = ha_mid + w * lo;
        let h_hi = ha_mid + w * hi;
        // Does [h_lo, h_hi] contain a multiple of 2π (an upper transit)?
        let kk = (h_hi / TAU).floor();
        let sin_alt = if kk * TAU >= h_lo {
            a + b
        } else {
            sin_alt_at(lo).max(sin_alt_at(hi))
        };
        best_sin = best_sin.max(sin_alt);
    }
    row.observable_hours = total_s / 3600.0;
    let best_obs = setup
        .refr
        .observed(best_sin.clamp(-1.0, 1.0).asin())
        .to_degrees();
    row.max_altitude_deg = Some(best_obs);
    row.best_airmass = kasten_young(best_obs);
    row.moon_separation_min_deg = max_dot
        .is_finite()
        .then(|| max_dot.clamp(-1.0, 1.0).acos().to_degrees());
    row.window_start_s = cur.first().map(|w| w.0);
    row.window_end_s = cur.last().map(|w| w.1);
    row.windows = cur.len().min(255) as u8;
    if setup.caution_possible {
        row.sun_caution = sun_caution_in(setup, sky, &u, cur);
    }
    row
}

fn sun_caution_in(setup: &ScanSetup, sky: &NightSky, u: &[f64; 3], ws: &[(f64, f64)]) -> bool {
    for ((s, up), v) in sky.grid_s.iter().zip(&sky.sun_up).zip(&sky.sun_v) {
        let near = ws
            .iter()
            .any(|(lo, hi)| *s >= lo - 600.0 && *s <= hi + 600.0);
        if near && *up && u[0] * v[0] + u[1] * v[1] + u[2] * v[2] > setup.cos_avoid {
            return true;
        }
    }
    false
}

/// All targets on one night, in parallel, into `rows` (resized to the target count).
pub fn scan_night(
    setup: &ScanSetup,
    sky: &NightSky,
    places: &[PreparedPlace],
    rows: &mut Vec<TargetNightRow>,
) {
    rows.resize(places.len(), TargetNightRow::default());
    rows.par_chunks_mut(CHUNK)
        .zip(places.par_chunks(CHUNK))
        .enumerate()
        .for_each_init(Scratch::default, |scratch, (ci, (out, ps))| {
            for (j, (r, p)) in out.iter_mut().zip(ps).enumerate() {
                *r = target_night(setup, sky, ci * CHUNK + j, p, scratch);
            }
        });
}

/// Scan every night from `from` to `to` (inclusive dates, each naming the
/// night that begins on its local evening) for every place, handing each night's
/// rows to `sink` in date order. The sink may stop the scan with
/// `ControlFlow::Break`. Memory holds one row per target and a few nights of
/// Sun/Moon grids, whatever the range.
///
/// Errors: an empty target list, a bad range (see [`nights_in`]), a date whose
/// night cannot be built.
pub fn scan<F>(
    site: &Site,
    places: &[CatalogPlace],
    from: NaiveDate,
    to: NaiveDate,
    c: &Constraints,
    mut sink: F,
) -> Result<()>
where
    F: FnMut(&NightRows<'_>) -> ControlFlow<()>,
{
    if places.is_empty() {
        return Err(RungError::invalid(
            "targets",
            "the target list is empty; a season scan needs at least one target",
        ));
    }
    let dates = nights_in(from, to)?;
    let nights = dates.len();
    let places: Vec<PreparedPlace> = places.iter().map(PreparedPlace::new).collect();
    let block = (2 * rayon::current_num_threads()).clamp(2, 16);
    let mut rows: Vec<TargetNightRow> = Vec::with_capacity(places.len());
    let mut setup: Option<ScanSetup> = None;
    let mut index = 0;
    for chunk in dates.chunks(block) {
        let skies: Vec<NightSky> = chunk
            .par_iter()
            .map(|d| NightSky::new(site, *d, c))
            .collect::<Result<_>>()?;
        for sky in &skies {
            let st = setup.get_or_insert_with(|| ScanSetup::new(site, c, sky));
            scan_night(st, sky, &places, &mut rows);
            let nr = NightRows {
                index,
                nights,
                sky,
                rows: &rows,
            };
            index += 1;
            if sink(&nr).is_break() {
                return Ok(());
            }
        }
    }
    Ok(())
}

/// Season totals of one target.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TargetSummary {
    /// Index of the target in the scanned list.
    pub target: usize,
    /// Observable hours summed over the range.
    pub total_hours: f64,
    /// Nights with any observable time.
    pub nights_observable: u32,
    /// First night with observable time.
    pub first_night: Option<NaiveDate>,
    /// Last night with observable time.
    pub last_night: Option<NaiveDate>,
    /// Calendar month (year, month) with the most observable hours.
    pub best_month: Option<(i32, u32)>,
    /// Observable hours in that month.
    pub best_month_hours: f64,
    /// Lowest airmass reached inside any window.
    pub best_airmass: Option<f64>,
    /// Night of that lowest airmass.
    pub best_airmass_night: Option<NaiveDate>,
    cur_month: Option<(i32, u32)>,
    cur_hours: f64,
}

impl TargetSummary {
    fn close_month(&mut self) {
        if let Some(m) = self.cur_month
            && self.cur_hours > self.best_month_hours
        {
            self.best_month = Some(m);
            self.best_month_hours = self.cur_hours;
        }
    }

    /// Best month as `YYYY-MM`.
    pub fn best_month_text(&self) -> Option<String> {
        self.best_month.map(|(y, m)| format!("{y:04}-{m:02}"))
    }
}

/// Per-target totals built from the streamed nights (nights must come in date order).
#[derive(Debug, Clone, Default)]
pub struct SeasonSummary {
    targets: Vec<TargetSummary>,
}

impl SeasonSummary {
    /// An empty summary for `n` targets.
    pub fn new(n: usize) -> Self {
        SeasonSummary {
            targets: (0..n)
                .map(|i| TargetSummary {
                    target: i,
                    ..Default::default()
                })
                .collect(),
        }
    }

    /// Add one night's rows.
    pub fn add(&mut self, night: &NightRows<'_>) {
        let d = night.sky.date;
        let month = (d.year(), d.month());
        for r in night.rows {
            let Some(t) = self.targets.get_mut(r.target) else {
                continue;
            };
            if t.cur_month != Some(month) {
                t.close_month();
                t.cur_month = Some(month);
                t.cur_hours = 0.0;
            }
            if r.observable_hours > 0.0 {
                t.total_hours += r.observable_hours;
                t.cur_hours += r.observable_hours;
                t.nights_observable += 1;
                t.first_night.get_or_insert(d);
                t.last_night = Some(d);
                if let Some(x) = r.best_airmass
                    && t.best_airmass.is_none_or(|b| x < b)
                {
                    t.best_airmass = Some(x);
                    t.best_airmass_night = Some(d);
                }
            }
        }
    }

    /// The totals, one per target in list order.
    pub fn finish(mut self) -> Vec<TargetSummary> {
        for t in &mut self.targets {
            t.close_month();
        }
        self.targets
    }
}
