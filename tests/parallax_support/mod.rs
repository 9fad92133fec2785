//! Shared helpers of the parallax tests: the fixture file and a small,
//! documented exposure model standing in for the photometry module.

#![allow(dead_code)]

use rung::Result;
use rung::astro::frames::{CatalogPlace, Context};
use rung::ladder::ExposureModel;

/// The fixture JSON written by tests/reference/make_parallax_fixtures.py.
pub fn fixtures() -> serde_json::Value {
    let text = include_str!("../reference/parallax_fixtures.json");
    serde_json::from_str(text).expect("fixture JSON parses")
}

/// A test exposure model: a star of magnitude m gives
/// 10^(−0.4 (m − zp_mag)) electrons per second against `sky_e_s` electrons per
/// second from the sky in the aperture, so that
/// SNR = N / sqrt(N + B) with N = rate·t, B = sky·t (the CCD equation without
/// read noise or dark current; Howell, Handbook of CCD Astronomy). The
/// exposure for an SNR solves that quadratic in t; exposures longer than
/// `max_sub_s` are split. Invented instrument numbers; no sky or airmass
/// dependence (the real model lives in the photometry module).
pub struct TestCamera {
    /// Magnitude giving 1 e⁻/s.
    pub zp_mag: f64,
    /// Sky electrons per second in the aperture.
    pub sky_e_s: f64,
    /// Longest single exposure, seconds.
    pub max_sub_s: f64,
    /// Seeing FWHM, arcseconds.
    pub fwhm_arcsec: f64,
}

impl Default for TestCamera {
    fn default() -> Self {
        TestCamera {
            zp_mag: 23.0,
            sky_e_s: 200.0,
            max_sub_s: 300.0,
            fwhm_arcsec: 1.2,
        }
    }
}

impl TestCamera {
    fn rate(&self, mag: f64) -> f64 {
        10f64.powf(-0.4 * (mag - self.zp_mag))
    }
}

impl ExposureModel for TestCamera {
    fn snr(
        &self,
        mag: f64,
        _band: &str,
        exptime_s: f64,
        _ctx: &Context,
        _p: &CatalogPlace,
    ) -> Result<f64> {
        let n = self.rate(mag) * exptime_s;
        Ok(n / (n + self.sky_e_s * exptime_s).sqrt())
    }
    fn exptime(
        &self,
        mag: f64,
        _band: &str,
        snr: f64,
        _ctx: &Context,
        _p: &CatalogPlace,
    ) -> Result<(f64, u32)> {
        // SNR² (r + s) t = r² t²  →  t = SNR² (r + s) / r².
        let r = self.rate(mag);
        let t = snr * snr * (r + self.sky_e_s) / (r * r);
        Ok((t, (t / self.max_sub_s).ceil().max(1.0) as u32))
    }
    fn visit_overhead_s(&self) -> f64 {
        120.0
    }
    fn readout_s(&self) -> f64 {
        10.0
    }
    fn seeing_fwhm_arcsec(&self) -> f64 {
        self.fwhm_arcsec
    }
}
