//! Barycentric Julian date in the TDB scale (BJD_TDB), the time scale of
//! pulsator ephemerides.
//!
//! BJD_TDB = JD_TDB + Δt_R, with the Rømer delay Δt_R = (r_obs · n̂)/c: the
//! light-travel time along the star's direction n̂ between the observer (at
//! barycentric position r_obs) and the Solar-System barycentre. r_obs is the
//! Earth's barycentric position from SOFA `epv00` plus the site's geocentric
//! position (SOFA `apco13`/`apco`, through [`Context::observer_bary_au`]), and
//! TDB is SOFA `dtdb` with the site's topocentric term ([`Instant::tdb`]).
//!
//! Neglected, each documented with its size:
//! - the Shapiro delay in the Sun's field, at most ~10 µs away from the Sun's
//!   limb (2GM☉/c³ · ln(…) ≈ 20 µs per e-fold);
//! - the curvature of the wavefront for a star at finite distance D,
//!   (|r|² − (r·n̂)²)/(2cD): about 1 µs at 1 kpc, 0.1 ms at 10 pc;
//! - the Einstein delay beyond TDB itself (TDB already carries it);
//! - `epv00`'s own error against JPL DE405: a few km in the Earth's position
//!   (≈ 10 µs of light time);
//! - DUT1 = 0 and no polar motion: the observer's geocentric position rotates
//!   by at most 0.9 s of Earth rotation, < 0.5 µs of delay.
//!
//! The whole is accurate to better than 1 ms for 1960–2099.

use crate::astro::frames::{CatalogPlace, Context};
use crate::astro::site::Site;
use crate::astro::time::{DAY_S, Instant};
use crate::error::Result;
use serde::Serialize;
use sofars::consts::DAU;

/// Speed of light, m/s (SI, exact).
pub const C_M_S: f64 = 299_792_458.0;

/// Light time for one astronomical unit, seconds: DAU / c = 499.004 78 s (IAU 2012 au).
pub const AU_LIGHT_S: f64 = DAU / C_M_S;

/// A barycentric Julian date in TDB, two-part (SOFA convention: `jd1` the
/// larger part, `jd2` the rest), so that sub-millisecond precision is kept.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Bjd {
    /// Larger part, days.
    pub jd1: f64,
    /// Remainder, days.
    pub jd2: f64,
}

impl Bjd {
    /// The date as one number (precision about 20 µs; use the parts for more).
    pub fn jd(&self) -> f64 {
        self.jd1 + self.jd2
    }

    /// Days since a reference BJD `e0`, keeping the two parts apart (exact to ~1 ns
    /// for spans of decades).
    pub fn days_since(&self, e0: f64) -> f64 {
        (self.jd1 - e0) + self.jd2
    }
}

/// Unit vector (BCRS axes) of a catalogue place as seen from the barycentre at
/// Julian epoch `epoch_tt` (years), proper motion applied by SOFA `pmpx` with
/// no parallax (the barycentric direction).
pub fn barycentric_direction(place: &CatalogPlace, epoch_tt: f64) -> [f64; 3] {
    sofars::astro::pmpx(
        place.ra_rad,
        place.dec_rad,
        place.pm_ra_rad_yr,
        place.pm_dec_rad_yr,
        0.0,
        place.rv_kms,
        epoch_tt - 2000.0,
        [0.0; 3],
    )
}

/// Rømer delay Δt = (r_obs · n̂)/c, seconds.
///
/// Inputs: `obs_bary_au` the observer's barycentric position (au, BCRS axes),
/// `n_hat` the star's barycentric unit vector. Result: seconds to add to the
/// arrival time at the observer to get the arrival time at the barycentre
/// (positive when the observer is on the star's side of the barycentre).
/// Accuracy: exact for a plane wave; see the module note for what is neglected.
/// Source: the classical light-time (Rømer) term, e.g. Eastman, Siverd & Gaudi
/// (2010, PASP 122, 935), eq. 4, first term (quoted from memory).
pub fn romer_delay_s(obs_bary_au: &[f64; 3], n_hat: &[f64; 3]) -> f64 {
    let d = obs_bary_au[0] * n_hat[0] + obs_bary_au[1] * n_hat[1] + obs_bary_au[2] * n_hat[2];
    d * AU_LIGHT_S
}

/// BJD_TDB of the instant of a context, for a star at `place` observed from `site`.
///
/// Inputs: `ctx` a context of `site` at the instant (exact, or from a
/// `NightFrame`), `place` the ICRS catalogue place. Result: two-part BJD_TDB.
/// Accuracy: better than 1 ms (module note); with a `NightFrame` context the
/// Earth's position is interpolated to < 1 km (≈ 3 µs) and TDB − TT (SOFA
/// `dtdb`) to a few µs.
pub fn bjd_tdb_ctx(site: &Site, ctx: &Context, place: &CatalogPlace) -> Bjd {
    let (t1, t2) = match ctx.tdb_minus_tt_s() {
        Some(d) => {
            let (a, b) = ctx.tt();
            (a, b + d / DAY_S)
        }
        None => {
            let (u_km, v_km) = site.spin_axis_uv_km();
            ctx.t.tdb(site.lon_rad(), u_km, v_km)
        }
    };
    let n = barycentric_direction(place, ctx.t.julian_epoch_tt());
    let dt_d = romer_delay_s(&ctx.observer_bary_au(), &n) / DAY_S;
    Bjd {
        jd1: t1,
        jd2: t2 + dt_d,
    }
}

/// BJD_TDB at instant `t` (UTC) for a star at `place` seen from `site`, through
/// the full SOFA chain (`apco13`). Errors only when SOFA refuses the instant.
pub fn bjd_tdb(site: &Site, t: Instant, place: &CatalogPlace) -> Result<Bjd> {
    let ctx = Context::exact(site, t)?;
    Ok(bjd_tdb_ctx(site, &ctx, place))
}

/// The Rømer delay alone (seconds) at instant `t` for `place` from `site`.
pub fn romer_delay_at(site: &Site, t: Instant, place: &CatalogPlace) -> Result<f64> {
    let ctx = Context::exact(site, t)?;
    let n = barycentric_direction(place, t.julian_epoch_tt());
    Ok(romer_delay_s(&ctx.observer_bary_au(), &n))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn au_light_time_is_499_s() {
        // 1 au / c = 499.004 784 s (IAU 2012 au = 149 597 870 700 m; fact of the trade).
        assert!((AU_LIGHT_S - 499.004_784).abs() < 1e-5);
    }

    #[test]
    fn delay_is_projection() {
        let r = [1.0, 0.0, 0.0];
        assert!((romer_delay_s(&r, &[1.0, 0.0, 0.0]) - AU_LIGHT_S).abs() < 1e-12);
        assert!(romer_delay_s(&r, &[0.0, 1.0, 0.0]).abs() < 1e-12);
        assert!((romer_delay_s(&r, &[-1.0, 0.0, 0.0]) + AU_LIGHT_S).abs() < 1e-12);
    }
}
