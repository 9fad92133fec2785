//! Shared helpers of the transient tests: the invented demo site, an
//! invented transient target, the chase setting that starts on its discovery
//! night, the method as of a given "now", the embedded coefficients, and a
//! small documented test exposure model standing in for the photometry module.

#![allow(dead_code)]

use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::Limits;
use rung::astro::site::Site;
use rung::astro::time::parse_instant;
use rung::io::sites;
use rung::io::targets::{Kind, Target};
use rung::ladder::transient::{ChaseOptions, TransientConfig, TransientMethod, night_of};
use rung::ladder::{ExposureModel, Setting};

/// The invented demo site.
pub fn site() -> Site {
    sites::resolve("pampa-lucero").unwrap()
}

/// The embedded coefficients, `config/transient.toml`.
pub fn cfg() -> TransientConfig {
    TransientConfig::embedded().expect("embedded config/transient.toml parses")
}

/// An invented transient in B (the band of the template and the
/// standardization), discovered at `disc` (ISO 8601) at `mag_now`, redshift `z`.
pub fn transient(name: &str, ra: f64, dec: f64, disc: &str, mag_now: f64, z: f64) -> Target {
    let mut t = Target::plain(name, ra, dec);
    t.kind = Kind::Transient;
    t.band = "B".into();
    t.discovered = Some(parse_instant(disc).unwrap());
    t.mag_now = Some(mag_now);
    t.redshift = Some(z);
    t
}

/// The chase setting of `t` at `site`: from its discovery night, `days`
/// nights on, inside `limits`.
pub fn chase_setting<'a>(site: &'a Site, t: &'a Target, days: i64, limits: Limits) -> Setting<'a> {
    let from = night_of(site, t.discovered.unwrap());
    Setting {
        site,
        target: t,
        from,
        to: from + chrono::Duration::days(days),
        limits,
    }
}

/// The method with the embedded coefficients and nothing planned before `now` (ISO 8601).
pub fn method_at(now: &str) -> TransientMethod {
    TransientMethod::with(
        cfg(),
        ChaseOptions {
            now: Some(parse_instant(now).unwrap()),
            ..Default::default()
        },
    )
}

/// Test exposure model (a stand-in for the photometry module, documented
/// here so the test does not depend on it): a 0.6 m-class telescope whose
/// source rate is 10^(−0.4 (m + k X − 22.0)) e⁻/s in B with k = 0.25 mag per
/// airmass (SCIENCE.md, common practice), a constant dark-sky background of
/// 120 e⁻/s in the aperture, 60 e⁻ of read noise squared per frame summed over
/// the aperture, and the CCD equation (Howell) solved in closed form for the
/// exposure; one sub-exposure per 600 s.
pub struct TestPhotometer;

impl TestPhotometer {
    fn rates(&self, mag: f64, ctx: &Context, place: &CatalogPlace) -> (f64, f64) {
        let alt = ctx.observe(place).alt_rad.to_degrees();
        let x = rung::astro::airmass::kasten_young(alt.max(1.0)).unwrap_or(40.0);
        (10f64.powf(-0.4 * (mag + 0.25 * x - 22.0)), 120.0)
    }
}

const RN2: f64 = 60.0 * 60.0;

impl ExposureModel for TestPhotometer {
    fn snr(
        &self,
        mag: f64,
        _band: &str,
        t: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> rung::Result<f64> {
        let (n, s) = self.rates(mag, ctx, place);
        let frames = (t / 600.0).ceil().max(1.0);
        Ok(n * t / (n * t + s * t + frames * RN2).sqrt())
    }
    fn exptime(
        &self,
        mag: f64,
        _band: &str,
        snr: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> rung::Result<(f64, u32)> {
        let (n, s) = self.rates(mag, ctx, place);
        // N² t² − SNR² (N + S) t − SNR² R = 0, first with one frame.
        let solve = |r: f64| {
            let b = snr * snr * (n + s);
            (b + (b * b + 4.0 * n * n * snr * snr * r).sqrt()) / (2.0 * n * n)
        };
        let mut t = solve(RN2);
        let frames = (t / 600.0).ceil().max(1.0);
        t = solve(frames * RN2);
        Ok((t, (t / 600.0).ceil().max(1.0) as u32))
    }
    fn visit_overhead_s(&self) -> f64 {
        180.0
    }
    fn readout_s(&self) -> f64 {
        20.0
    }
    fn seeing_fwhm_arcsec(&self) -> f64 {
        1.2
    }
}
