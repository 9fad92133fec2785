//! The multi-band light-curve template: THIS PROJECT'S OWN APPROXIMATION of a
//! normal thermonuclear supernova (docs/science.md, Thermonuclear
//! supernovae; shapes and sources in config/transient.toml).
//!
//! Five parameters describe a supernova ([`CurveParams`]): the time of B
//! maximum, the B peak, the decline rate Δm15(B), the colour (B − V at
//! maximum, as observed) and the rise time from explosion to B maximum. Each
//! band follows the same shape with its own maximum, decline and peak colour;
//! dust reddens the peaks by the Cardelli, Clayton & Mathis (1989) law.

use super::config::{BandShape, TransientConfig};
use crate::error::{Result, RungError};
use crate::sky::dust::extinction_per_ebv;
use serde::Serialize;
use std::f64::consts::LN_10;

/// Number of light-curve parameters.
pub const N_PARAMS: usize = 5;
/// The parameters' names, in the order of [`CurveParams::as_array`].
pub const PARAM_NAMES: [&str; N_PARAMS] = ["t_max", "peak", "dm15", "colour", "rise"];

/// The parameters of one supernova's light curves.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CurveParams {
    /// Time of B maximum, MJD (UTC).
    pub t_max_mjd: f64,
    /// Apparent B peak magnitude, mag.
    pub m_max: f64,
    /// Decline rate Δm15(B), mag in 15 rest-frame days.
    pub dm15: f64,
    /// Observed colour: B peak minus V peak, mag (intrinsic colour, host and
    /// foreground reddening together).
    pub colour_mag: f64,
    /// Rest-frame days from explosion to B maximum.
    pub rise_days: f64,
}

impl CurveParams {
    /// As an array in the order of [`PARAM_NAMES`].
    pub fn as_array(&self) -> [f64; N_PARAMS] {
        [
            self.t_max_mjd,
            self.m_max,
            self.dm15,
            self.colour_mag,
            self.rise_days,
        ]
    }
    /// From an array in the order of [`PARAM_NAMES`].
    pub fn from_array(p: [f64; N_PARAMS]) -> Self {
        CurveParams {
            t_max_mjd: p[0],
            m_max: p[1],
            dm15: p[2],
            colour_mag: p[3],
            rise_days: p[4],
        }
    }
}

/// Decline time scale T (rest-frame days) for which a band with drop
/// `knee_mag` and tail `tail_mag_per_day` falls by `dm15` in 15 days, or
/// `None` when it cannot fall that fast (or `dm15` ≤ 0).
pub fn decline_scale_days(knee_mag: f64, tail_mag_per_day: f64, dm15: f64) -> Option<f64> {
    let a = knee_mag + 15.0 * tail_mag_per_day;
    let r = dm15 / a;
    if !(r > 0.0 && r < 1.0) {
        return None;
    }
    Some(15.0 / (-(1.0 - r).ln()).sqrt())
}

/// Magnitudes below the peak on the rise, `tau_d` rest-frame days before the
/// band's maximum (negative), for a rise of `rise_d` days: flux ∝ x² exp(2(1 − x)),
/// x = 1 + τ/rise, so Δm = −5 log10 x + (5/ln 10)(x − 1). `None` before the
/// explosion.
pub fn rise_delta_mag(tau_d: f64, rise_d: f64) -> Option<f64> {
    let x = 1.0 + tau_d / rise_d;
    if x <= 0.0 || rise_d <= 0.0 {
        return None;
    }
    Some(-5.0 * x.log10() + 5.0 / LN_10 * (x - 1.0))
}

/// Magnitudes below the peak at rest-frame phase `tau_d` (days from the
/// band's maximum) for a band of `shape`, decline rate `dm15_band` (mag in 15
/// days) and rise `rise_d` (days from explosion to the band's maximum). The
/// project's own approximation: good to a few tenths of a magnitude for a
/// normal event, not better. `None` before the explosion or for a decline
/// rate the shape cannot follow.
pub fn band_delta_mag(shape: &BandShape, tau_d: f64, dm15_band: f64, rise_d: f64) -> Option<f64> {
    if tau_d < 0.0 {
        rise_delta_mag(tau_d, rise_d)
    } else {
        let t = decline_scale_days(shape.knee_mag, shape.tail_slope_mag_per_day, dm15_band)?;
        let g = 1.0 - (-(tau_d / t).powi(2)).exp();
        Some((shape.knee_mag + shape.tail_slope_mag_per_day * tau_d) * g)
    }
}

/// The rest-frame phase (days, negative) on the rise at which the supernova
/// is `dm` magnitudes below its peak, for a rise of `rise_d` days (bisection
/// to 1e-6 d); `None` for `dm` ≤ 0.
pub fn rise_phase_for(dm: f64, rise_d: f64) -> Option<f64> {
    if !(dm > 0.0 && dm.is_finite()) {
        return None;
    }
    let (mut lo, mut hi) = (-rise_d * (1.0 - 1e-12), 0.0_f64);
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        let v = rise_delta_mag(mid, rise_d).unwrap_or(f64::INFINITY);
        if v > dm {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-6 {
            break;
        }
    }
    Some(0.5 * (lo + hi))
}

/// One band of the model with its dust coefficients.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelBand {
    /// The shape from the configuration.
    pub shape: BandShape,
    /// A_band / E(B−V) for host dust (the host R_V).
    pub r_host: f64,
    /// A_band / E(B−V) for Milky-Way dust.
    pub r_mw: f64,
    /// d r_host / dR_V at the host R_V.
    pub dr_host_dr_v: f64,
}

/// The template bound to a configuration, a redshift and a foreground
/// colour excess: magnitudes in every band of the template.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Model {
    /// The bands, in the order of `config/transient.toml`.
    pub bands: Vec<ModelBand>,
    /// Redshift (time dilation), ≥ 0.
    pub z: f64,
    /// Foreground colour excess E(B−V), mag.
    pub ebv_mw: f64,
    /// Intrinsic B−V at Δm15 = 1.1, mag.
    pub intrinsic_colour_mag: f64,
    /// d(B−V)₀/dΔm15.
    pub intrinsic_colour_slope: f64,
    /// Index of V in `bands`.
    v: usize,
}

impl Model {
    /// The model of `cfg`'s template at redshift `z` with a foreground
    /// colour excess `ebv_mw`; the dust coefficients come from each band's
    /// effective wavelength in the band table (config/bands.toml and the
    /// user's) and the Cardelli, Clayton & Mathis (1989) law.
    pub fn new(cfg: &TransientConfig, z: f64, ebv_mw: f64) -> Result<Model> {
        let table = crate::sky::BandSet::load()?;
        let mut bands = Vec::with_capacity(cfg.template.band.len());
        for s in &cfg.template.band {
            let b = table.get(&s.name)?;
            let lam = b.lambda_eff_angstrom;
            let rv = cfg.extinction.host_r_v;
            let h = 0.01;
            bands.push(ModelBand {
                shape: s.clone(),
                r_host: extinction_per_ebv(lam, rv)?,
                r_mw: extinction_per_ebv(lam, cfg.extinction.milky_way_r_v)?,
                dr_host_dr_v: (extinction_per_ebv(lam, rv + h)? - extinction_per_ebv(lam, rv - h)?)
                    / (2.0 * h),
            });
        }
        let v = bands
            .iter()
            .position(|b| b.shape.name == "V")
            .ok_or_else(|| RungError::invalid("template.band", "the template needs a V band"))?;
        Ok(Model {
            bands,
            z,
            ebv_mw,
            intrinsic_colour_mag: cfg.extinction.intrinsic_colour_mag,
            intrinsic_colour_slope: cfg.extinction.intrinsic_colour_slope,
            v,
        })
    }

    /// Index of `band` in the model, or an error naming the bands it has.
    pub fn band_index(&self, band: &str) -> Result<usize> {
        self.bands
            .iter()
            .position(|b| b.shape.name == band)
            .ok_or_else(|| RungError::Unknown {
                what: "band of the supernova template".into(),
                name: band.into(),
                hint: format!(
                    "; the template (config/transient.toml, [[template.band]]) has {}",
                    self.bands
                        .iter()
                        .map(|b| b.shape.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            })
    }

    /// Intrinsic (dust-free) B−V at B maximum for decline rate `dm15`
    /// (Phillips et al. 1999 form; coefficients in config), mag.
    pub fn intrinsic_colour(&self, dm15: f64) -> f64 {
        self.intrinsic_colour_mag + self.intrinsic_colour_slope * (dm15 - 1.1)
    }

    /// Host colour excess E(B−V) implied by the parameters: the observed
    /// colour less the intrinsic colour and the foreground excess, mag.
    pub fn host_ebv(&self, p: &CurveParams) -> f64 {
        p.colour_mag - self.intrinsic_colour(p.dm15) - self.ebv_mw
    }

    /// Peak of band `k` minus the B peak, mag: 0 for B, −colour for V, and
    /// for another band X, −colour + (X − V)₀ + (R_X − R_V)(host E(B−V)) +
    /// (R_X − R_V)_MW E(B−V)_MW.
    pub fn peak_offset(&self, k: usize, p: &CurveParams) -> f64 {
        let b = &self.bands[k];
        match b.shape.name.as_str() {
            "B" => 0.0,
            "V" => -p.colour_mag,
            _ => {
                let v = &self.bands[self.v];
                -p.colour_mag
                    + b.shape.colour_to_v_mag.unwrap_or(0.0)
                    + (b.r_host - v.r_host) * self.host_ebv(p)
                    + (b.r_mw - v.r_mw) * self.ebv_mw
            }
        }
    }

    /// Apparent magnitude in band `k` at `t_mjd` (MJD, UTC): the B peak, the
    /// band's peak offset, and the band's shape at rest-frame phase
    /// (t − t_max)/(1 + z) − (the band's maximum offset). `None` before the
    /// explosion.
    pub fn mag(&self, k: usize, p: &CurveParams, t_mjd: f64) -> Option<f64> {
        let b = &self.bands[k];
        let tau = (t_mjd - p.t_max_mjd) / (1.0 + self.z) - b.shape.max_offset_days;
        let rise = p.rise_days + b.shape.max_offset_days;
        let d = band_delta_mag(&b.shape, tau, b.shape.dm15_ratio * p.dm15, rise)?;
        Some(p.m_max + self.peak_offset(k, p) + d)
    }

    /// Derivatives of [`Model::mag`] with respect to the parameters (order of
    /// [`PARAM_NAMES`]) by central differences with steps of 1e-4 (days or
    /// mag); the template is smooth, so the error is below 1e-7 relative.
    /// `None` where the curve is not defined there or nearby.
    pub fn gradient(&self, k: usize, p: &CurveParams, t_mjd: f64) -> Option<[f64; N_PARAMS]> {
        let h = 1e-4;
        let mut g = [0.0; N_PARAMS];
        for (i, gi) in g.iter_mut().enumerate() {
            let mut a = p.as_array();
            let mut b = p.as_array();
            a[i] += h;
            b[i] -= h;
            let fa = self.mag(k, &CurveParams::from_array(a), t_mjd)?;
            let fb = self.mag(k, &CurveParams::from_array(b), t_mjd)?;
            *gi = (fa - fb) / (2.0 * h);
        }
        Some(g)
    }
}
