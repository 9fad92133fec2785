//! Time scales, sites, frames (via sofars), Sun, Moon, airmass and events.

pub mod airmass;
pub mod bary;
pub mod events;
pub mod frames;
pub mod night;
pub mod site;
pub mod time;
pub mod visibility;
pub mod window;

use crate::astro::frames::{CatalogPlace, Context};
use crate::astro::site::Site;
use crate::astro::time::Instant;
use serde::Serialize;

/// Everything about one target at one instant, as `rung where` reports it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pointing {
    /// Observed (refracted) altitude, degrees.
    pub altitude_deg: f64,
    /// Geometric (unrefracted) altitude, degrees.
    pub altitude_geometric_deg: f64,
    /// Azimuth, degrees, north 0, east 90.
    pub azimuth_deg: f64,
    /// Kasten–Young airmass, `None` below the horizon.
    pub airmass: Option<f64>,
    /// Hour angle, hours in (−12, 12].
    pub hour_angle_h: f64,
    /// Parallactic angle, degrees (SOFA `hd2pa`).
    pub parallactic_angle_deg: f64,
    /// Geometric altitude of the Sun's centre, degrees (topocentric).
    pub sun_altitude_deg: f64,
    /// Angular distance from the Sun, degrees.
    pub sun_separation_deg: f64,
    /// Geometric altitude of the Moon's centre, degrees (topocentric).
    pub moon_altitude_deg: f64,
    /// Azimuth of the Moon, degrees.
    pub moon_azimuth_deg: f64,
    /// Target–Moon separation, degrees (topocentric).
    pub moon_separation_deg: f64,
    /// Moon illuminated fraction, 0–1.
    pub moon_illumination: f64,
    /// Moon phase angle (Sun–Moon–Earth), degrees; 0 at full Moon.
    pub moon_phase_angle_deg: f64,
    /// Pressure used for refraction, hPa.
    pub pressure_hpa: f64,
    /// Temperature used for refraction, °C.
    pub temperature_c: f64,
}

/// Where a target is, seen from `site` through the context `ctx`.
pub fn pointing(site: &Site, ctx: &Context, place: &CatalogPlace) -> Pointing {
    let o = ctx.observe(place);
    let sun = ctx.sun();
    let moon = ctx.moon();
    let pa = sofars::coords::hd2pa(o.ha_rad, o.dec_rad, site.lat_rad());
    let alt_deg = o.alt_rad.to_degrees();
    Pointing {
        altitude_deg: alt_deg,
        altitude_geometric_deg: o.alt_geom_rad.to_degrees(),
        azimuth_deg: o.az_rad.to_degrees().rem_euclid(360.0),
        airmass: airmass::kasten_young(alt_deg),
        hour_angle_h: o.ha_rad.to_degrees() / 15.0,
        parallactic_angle_deg: pa.to_degrees(),
        sun_altitude_deg: sun.alt_geom_rad.to_degrees(),
        sun_separation_deg: o.separation_rad(&sun).to_degrees(),
        moon_altitude_deg: moon.alt_geom_rad.to_degrees(),
        moon_azimuth_deg: moon.az_rad.to_degrees().rem_euclid(360.0),
        moon_separation_deg: o.separation_rad(&moon).to_degrees(),
        moon_illumination: ctx.moon_illumination(),
        moon_phase_angle_deg: ctx.moon_phase_angle_rad().to_degrees(),
        pressure_hpa: site.pressure_hpa(),
        temperature_c: site.temperature_c,
    }
}

/// Altitude of the Sun's centre above which the Sun counts as up for the
/// Sun-avoidance rule, degrees (the sunrise/sunset altitude).
pub const SUN_UP_DEG: f64 = night::SUN_RISE_SET_DEG;

/// Target–Moon angular distance at instant `t` of `night`, degrees: both
/// topocentric apparent places from the night's interpolated frame (SOFA
/// `apco` through sofars, Moon from `moon98`). Accuracy well under 0.01°, far
/// finer than any Moon-avoidance rule needs.
pub fn moon_separation_deg(night: &night::Night, place: &CatalogPlace, t: Instant) -> f64 {
    let c = night.context(t);
    c.observe(place).separation_rad(&c.moon()).to_degrees()
}

/// The instants of a night's grid at which the Sun is up, with what the
/// Sun-avoidance check needs there (the grid index, the offset from the
/// night's start, the Sun's CIRS hour angle and declination): found once per
/// night and shared by every target's [`first_sun_caution_in`].
#[derive(Debug, Clone, Default)]
pub struct SunUpGrid {
    /// Per grid instant with the Sun up: index, offset (s), Sun hour angle
    /// (rad), sine and cosine of the Sun's declination.
    points: Vec<(usize, f64, f64, f64, f64)>,
    /// Where the Sun stands through those instants, for a whole-night check
    /// ([`SunUpGrid::far_all_day`]); `None` when it moves too far for one.
    reach: Option<SunReach>,
}

/// The span of the Sun's places over a night's Sun-up instants, as the
/// closed form of a target's track meets them: a target's hour angle from
/// the Sun at grid offset s is its middle hour angle plus
/// q(s) = ω (s − span/2) − H☉(s), which moves by about a degree a day.
#[derive(Debug, Clone, Copy)]
struct SunReach {
    /// Middle of q's range and its half-width, radians.
    q_mid: f64,
    q_half: f64,
    /// Least and greatest sine of the Sun's declination, greatest cosine.
    sin_dec_lo: f64,
    sin_dec_hi: f64,
    cos_dec_hi: f64,
}

impl SunReach {
    fn new(points: &[(usize, f64, f64, f64, f64)], span_s: f64) -> Option<Self> {
        let q = |&(_, s, ha, _, _): &(usize, f64, f64, f64, f64)| {
            visibility::ERA_RATE_RAD_S * (s - 0.5 * span_s) - ha
        };
        let q0 = q(points.first()?);
        let (mut lo, mut hi) = (0.0f64, 0.0f64);
        let (mut ss_lo, mut ss_hi, mut cs_hi) = (1.0f64, -1.0f64, 0.0f64);
        for p in points {
            let d = sofars::vm::anpm(q(p) - q0);
            lo = lo.min(d);
            hi = hi.max(d);
            ss_lo = ss_lo.min(p.3);
            ss_hi = ss_hi.max(p.3);
            cs_hi = cs_hi.max(p.4);
        }
        let q_half = 0.5 * (hi - lo);
        (q_half < 0.5).then_some(SunReach {
            q_mid: q0 + 0.5 * (lo + hi),
            q_half,
            sin_dec_lo: ss_lo,
            sin_dec_hi: ss_hi,
            cos_dec_hi: cs_hi,
        })
    }
}

impl SunUpGrid {
    /// The grid instants of `night` with the Sun above [`SUN_UP_DEG`].
    pub fn new(night: &night::Night) -> Self {
        let points = night
            .contexts
            .iter()
            .zip(&night.sun_alt_deg)
            .enumerate()
            .filter(|(_, (_, sun_alt))| **sun_alt > SUN_UP_DEG)
            .map(|(i, (c, _))| {
                let sun = &night.sun[i];
                let (ss, cs) = sun.dec_rad.sin_cos();
                (i, night.sky.offset(c.t), sun.ha_rad, ss, cs)
            })
            .collect::<Vec<_>>();
        let reach = SunReach::new(&points, night.sky.span_s());
        SunUpGrid { points, reach }
    }

    /// Whether a target whose closed-form track has middle hour angle
    /// `ha_mid_rad` and declination sine/cosine `sd`, `cd` stays farther
    /// than `sep_deg` from the Sun at every Sun-up instant of the grid, by
    /// the closed form (a bound over the Sun's range of places; `false` when
    /// it cannot tell).
    fn far_all_day(&self, ha_mid_rad: f64, sd: f64, cd: f64, sep_deg: f64) -> bool {
        let Some(r) = self.reach else {
            return false;
        };
        if !(0.0..179.0).contains(&sep_deg) {
            return false;
        }
        // The nearest the hour angle from the Sun comes to 0 (mod 2π).
        let c = sofars::vm::anpm(ha_mid_rad + r.q_mid).abs();
        let cos_ha_max = if c <= r.q_half {
            1.0
        } else {
            (c - r.q_half).cos()
        };
        let cos_sep_max =
            (sd * r.sin_dec_lo).max(sd * r.sin_dec_hi) + cd * r.cos_dec_hi * cos_ha_max.max(0.0);
        cos_sep_max + 1e-9 < sep_deg.to_radians().cos()
    }
}

/// The first instant on the night's 10-minute grid at which the target is
/// above the horizon within the site's Sun-avoidance angle while the Sun is
/// up, with the caution text of [`sun_caution`]; `None` when there is none.
/// A grid check: the separation changes by about 2.5′ between grid points
/// (the Sun moves about 1° a day among the stars), so only the start of a
/// spell, set by the Sun or the target rising, can be late by up to the step.
pub fn first_sun_caution(night: &night::Night, place: &CatalogPlace) -> Option<(Instant, String)> {
    first_sun_caution_in(night, &SunUpGrid::new(night), place)
}

/// [`first_sun_caution`] with the night's Sun-up instants found once
/// ([`SunUpGrid::new`] of the same `night`), for many targets.
pub fn first_sun_caution_in(
    night: &night::Night,
    grid: &SunUpGrid,
    place: &CatalogPlace,
) -> Option<(Instant, String)> {
    if grid.points.is_empty() {
        return None;
    }
    first_sun_caution_on(night, grid, &night.track(place), place)
}

/// [`first_sun_caution_in`] with the target's track through the night
/// already built (`night.track(place)`).
pub fn first_sun_caution_on(
    night: &night::Night,
    grid: &SunUpGrid,
    track: &visibility::Track,
    place: &CatalogPlace,
) -> Option<(Instant, String)> {
    if grid.points.is_empty() {
        return None;
    }
    // The closed form of the target's track (good to 1″) skips the grid
    // instants where the target is well below the horizon or well away from
    // the Sun; the rest are checked on the exact places, as before.
    let (sd, cd) = track.dec_mid_rad().sin_cos();
    // A target that stays 0.05° beyond the Sun-avoidance angle all day by
    // the closed form (far more than its 1″ error) has no caution: no grid
    // instant needs a look.
    let ha_mid = track.ha_linear(0.5 * night.sky.span_s());
    if grid.far_all_day(ha_mid, sd, cd, night.site.sun_avoid_deg + 0.05) {
        return None;
    }
    let cos_far = (night.site.sun_avoid_deg + 0.1)
        .min(180.0)
        .to_radians()
        .cos();
    let sin_low = (-1f64).to_radians().sin();
    for &(i, s, sun_ha, ss, cs) in &grid.points {
        if track.sin_alt_linear(s) < sin_low {
            continue;
        }
        if sd * ss + cd * cs * (track.ha_linear(s) - sun_ha).cos() < cos_far {
            continue;
        }
        let c = &night.contexts[i];
        let o = c.observe(place);
        if o.alt_rad <= 0.0 {
            continue;
        }
        // The Sun on the grid is the context's own (`Night::sun`), so this
        // is the caution of the full pointing without its Moon.
        let sun = &night.sun[i];
        if let Some(m) = caution_text(
            &night.site,
            sun.alt_geom_rad.to_degrees(),
            o.separation_rad(sun).to_degrees(),
        ) {
            return Some((c.t, m));
        }
    }
    None
}

/// A Sun-proximity caution when a pointing is within the site's Sun-avoidance
/// angle while the Sun is up. Pointing near the Sun can blind and can destroy
/// instruments; the observatory's own rules prevail over this check.
pub fn sun_caution(site: &Site, p: &Pointing) -> Option<String> {
    caution_text(site, p.sun_altitude_deg, p.sun_separation_deg)
}

/// [`sun_caution`] for a target seen through `ctx`, computing only the
/// target's and the Sun's places (what a caution needs, without the Moon).
pub fn sun_caution_at(site: &Site, ctx: &Context, place: &CatalogPlace) -> Option<String> {
    let sun = ctx.sun();
    let sep = ctx.observe(place).separation_rad(&sun).to_degrees();
    caution_text(site, sun.alt_geom_rad.to_degrees(), sep)
}

fn caution_text(site: &Site, sun_alt_deg: f64, sun_sep_deg: f64) -> Option<String> {
    if sun_alt_deg > SUN_UP_DEG && sun_sep_deg < site.sun_avoid_deg {
        Some(format!(
            "SUN CAUTION: target is {sun_sep_deg:.1}° from the Sun while the Sun is up (site limit {:.0}°); do not point there without the observatory's own safety clearance",
            site.sun_avoid_deg
        ))
    } else {
        None
    }
}
