//! Thermonuclear supernovae: the chase from discovery to a standardized-candle
//! distance.
//!
//! From the discovery on, night by night until a horizon: the observable
//! window, the expected brightness on a parametric light-curve template and
//! the exposure it needs; then the sparsest cadence whose Fisher-matrix
//! precision of (time of maximum, peak magnitude, decline rate Δm15) buys the
//! distance goal, and the distance precision it buys after the decline-rate
//! standardization, extinction and peculiar velocities.
//!
//! Coefficients (standardization, scatter, H0, σ_v, template shape, planning
//! defaults) come from `config/transient.toml`, embedded as the default; the
//! sources are named there. The light-curve template is this project's own
//! approximation (see [`TemplateParams`]).

use crate::astro::frames::CatalogPlace;
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::astro::{pointing, sun_caution};
use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::{BANDS, Kind, Target};
use crate::ladder::{Epoch, ExposureModel, Method, Prediction, Setting, Verdict};
use chrono::{Duration, NaiveDate};
use serde::{Deserialize, Serialize};
use std::f64::consts::LN_10;
use std::path::Path;

/// The default coefficients, `config/transient.toml`, compiled in.
pub const DEFAULT_CONFIG_TOML: &str = config::TRANSIENT.builtin;

/// Speed of light, km/s (SI definition).
pub const C_KM_S: f64 = 299_792.458;

/// Magnitude error per unit inverse signal-to-noise, 2.5 / ln 10 ≈ 1.0857:
/// σ_m ≈ 1.0857 / SNR for SNR ≫ 1 (first-order error propagation of
/// m = −2.5 log10 F; common practice).
pub const MAG_PER_INV_SNR: f64 = 2.5 / LN_10;

/// Decline-rate standardization of the peak (see `config/transient.toml`).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Standardization {
    /// Band the relation, the template and Δm15 refer to.
    pub band: String,
    /// Peak absolute magnitude at Δm15 = `dm15_ref`, mag.
    pub m0_mag: f64,
    /// Slope b of M_max against Δm15, mag per mag.
    pub slope_b: f64,
    /// Reference decline rate, mag.
    pub dm15_ref: f64,
    /// Intrinsic scatter after standardization, mag.
    pub sigma_int_mag: f64,
    /// Smallest Δm15 the relation is used for, mag.
    pub dm15_min: f64,
    /// Largest Δm15 the relation is used for, mag.
    pub dm15_max: f64,
}

/// Distance scale of the Hubble flow.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Cosmology {
    /// Hubble constant, km/s/Mpc.
    pub h0_km_s_mpc: f64,
    /// Peculiar-velocity dispersion along the line of sight, km/s.
    pub sigma_v_km_s: f64,
}

/// Extinction uncertainty model.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ExtinctionModel {
    /// σ_A as a fraction of the foreground extinction A.
    pub sigma_fraction: f64,
    /// Host-galaxy extinction allowance, mag (quadrature).
    pub host_sigma_mag: f64,
}

/// Shape of the light-curve template: THIS PROJECT'S OWN APPROXIMATION.
///
/// With τ the rest-frame days from maximum and Δm the magnitudes below peak:
/// - rise (τ < 0): flux ∝ x² exp(2(1 − x)), x = 1 + τ/`rise_days`, i.e.
///   Δm = −5 log10 x + (5/ln 10)(x − 1); undefined (no supernova) for x ≤ 0;
/// - decline (τ ≥ 0): Δm = (`knee_mag` + `tail_slope_mag_per_day`·τ)(1 − exp(−(τ/T)²)),
///   with T fixed by Δm(15 d) = Δm15.
///
/// Both branches have zero slope at maximum, so the curve is smooth there.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct TemplateParams {
    /// Rest-frame rise time from explosion to maximum, days.
    pub rise_days: f64,
    /// Size of the fast post-maximum drop, mag.
    pub knee_mag: f64,
    /// Slope of the late tail, mag per rest-frame day.
    pub tail_slope_mag_per_day: f64,
}

/// Planning defaults.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Planning {
    /// Follow-up span after discovery, days.
    pub horizon_days: u32,
    /// Signal-to-noise asked of each epoch.
    pub snr_goal: f64,
    /// Δm15 assumed for planning, mag.
    pub dm15_prior: f64,
    /// Per-epoch photometric floor, mag (quadrature).
    pub phot_floor_mag: f64,
    /// Rest-frame phase assumed at discovery when nothing else places the curve, days.
    pub discovery_phase_days: f64,
    /// Longest exposure of one epoch, s.
    pub max_exptime_s: f64,
    /// Sparsest regular cadence tried, nights.
    pub max_every_n: u32,
    /// Half width of the dense run around maximum, observed days.
    pub dense_half_width_days: f64,
    /// Photometric share of the floor when the goal is below the floor.
    pub phot_share_of_floor: f64,
    /// Distance goal when none is given, percent.
    pub default_goal_pct: f64,
}

/// All coefficients of the transient method.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct TransientConfig {
    /// Decline-rate standardization.
    pub standardization: Standardization,
    /// Hubble law and peculiar velocities.
    pub cosmology: Cosmology,
    /// Extinction uncertainty.
    pub extinction: ExtinctionModel,
    /// Template shape.
    pub template: TemplateParams,
    /// Planning defaults.
    pub planning: Planning,
}

impl TransientConfig {
    /// The compiled-in `config/transient.toml`.
    pub fn embedded() -> Result<Self> {
        config::merged(&[config::TRANSIENT.builtin_layer()], Self::validated)
    }

    /// The built-in coefficients with the user's `transient.toml` (user config
    /// folder) and then `extra` (a file named on the command line) merged over
    /// them key by key; errors name the file, line and key.
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        config::merged(&config::TRANSIENT.layers(extra)?, Self::validated)
    }

    /// Parse and check a complete transient configuration; `file` names it in errors.
    pub fn parse(text: &str, file: &Path) -> Result<Self> {
        config::merged(&[Layer::new(text, file)], Self::validated)
    }

    /// Check every value; a bad one is `RungError::Invalid` naming its dotted key.
    pub fn validated(self) -> Result<Self> {
        let c = self;
        let bad = |field: &str, why: &str| RungError::invalid(field, why);
        let s = &c.standardization;
        if !BANDS.contains(&s.band.as_str()) {
            return Err(bad("standardization.band", "must be one of U, B, V, R, I"));
        }
        if !(s.m0_mag.is_finite() && (-22.0..-17.0).contains(&s.m0_mag)) {
            return Err(bad("standardization.m0_mag", "must be within -22..-17 mag"));
        }
        if !(s.slope_b.is_finite() && (0.0..3.0).contains(&s.slope_b)) {
            return Err(bad("standardization.slope_b", "must be within 0..3"));
        }
        if !(s.sigma_int_mag.is_finite() && (0.0..1.0).contains(&s.sigma_int_mag)) {
            return Err(bad(
                "standardization.sigma_int_mag",
                "must be within 0..1 mag",
            ));
        }
        if !(s.dm15_min > 0.0 && s.dm15_min < s.dm15_max) {
            return Err(bad(
                "standardization.dm15_min",
                "must be positive and below dm15_max",
            ));
        }
        let t = &c.template;
        if !(t.rise_days.is_finite() && (5.0..40.0).contains(&t.rise_days)) {
            return Err(bad("template.rise_days", "must be within 5..40 days"));
        }
        if !(t.knee_mag > 0.0 && t.tail_slope_mag_per_day >= 0.0 && t.tail_slope_mag_per_day < 0.1)
        {
            return Err(bad(
                "template.knee_mag",
                "knee_mag must be positive and tail_slope_mag_per_day within 0..0.1",
            ));
        }
        if s.dm15_max >= t.knee_mag + 15.0 * t.tail_slope_mag_per_day {
            return Err(bad(
                "standardization.dm15_max",
                "must be below knee_mag + 15 * tail_slope_mag_per_day (the template cannot fall faster)",
            ));
        }
        let k = &c.cosmology;
        if !(k.h0_km_s_mpc.is_finite() && (20.0..200.0).contains(&k.h0_km_s_mpc)) {
            return Err(bad(
                "cosmology.h0_km_s_mpc",
                "must be within 20..200 km/s/Mpc",
            ));
        }
        if !(k.sigma_v_km_s.is_finite() && (0.0..3000.0).contains(&k.sigma_v_km_s)) {
            return Err(bad("cosmology.sigma_v_km_s", "must be within 0..3000 km/s"));
        }
        let e = &c.extinction;
        if !(e.sigma_fraction >= 0.0 && e.sigma_fraction <= 1.0 && e.host_sigma_mag >= 0.0) {
            return Err(bad(
                "extinction.sigma_fraction",
                "sigma_fraction must be within 0..1 and host_sigma_mag not negative",
            ));
        }
        let p = &c.planning;
        if !(1..=365).contains(&p.horizon_days) {
            return Err(bad("planning.horizon_days", "must be within 1..365"));
        }
        if !(p.snr_goal.is_finite() && (2.0..10_000.0).contains(&p.snr_goal)) {
            return Err(bad("planning.snr_goal", "must be within 2..10000"));
        }
        if !(s.dm15_min..=s.dm15_max).contains(&p.dm15_prior) {
            return Err(bad(
                "planning.dm15_prior",
                "must lie within standardization.dm15_min..dm15_max",
            ));
        }
        if !(p.phot_floor_mag >= 0.0 && p.phot_floor_mag < 0.5) {
            return Err(bad("planning.phot_floor_mag", "must be within 0..0.5 mag"));
        }
        if !(p.discovery_phase_days > -t.rise_days && p.discovery_phase_days < 60.0) {
            return Err(bad(
                "planning.discovery_phase_days",
                "must lie after explosion (> -rise_days) and before +60 d",
            ));
        }
        if !(p.max_exptime_s > 0.0 && p.max_every_n >= 1 && p.max_every_n <= 30) {
            return Err(bad(
                "planning.max_every_n",
                "max_exptime_s must be positive and max_every_n within 1..30",
            ));
        }
        if !(p.dense_half_width_days >= 0.0
            && p.phot_share_of_floor > 0.0
            && p.phot_share_of_floor <= 1.0)
        {
            return Err(bad(
                "planning.phot_share_of_floor",
                "must be within (0, 1], and dense_half_width_days not negative",
            ));
        }
        if !(p.default_goal_pct > 0.0 && p.default_goal_pct <= 100.0) {
            return Err(bad("planning.default_goal_pct", "must be within (0, 100]"));
        }
        Ok(c)
    }
}

impl Standardization {
    /// Phillips (1993, ApJ 413, L105); Phillips et al. (1999, AJ 118, 1766):
    /// peak absolute magnitude M_max = M0 + b (Δm15 − Δm15_ref), mag, from the
    /// decline rate Δm15 (mag in 15 rest-frame days after maximum). Coefficients
    /// from config (quoted from memory); accuracy is the intrinsic scatter.
    pub fn peak_abs_mag(&self, dm15: f64) -> f64 {
        self.m0_mag + self.slope_b * (dm15 - self.dm15_ref)
    }
}

/// Hubble-law distance modulus μ = 5 log10(c z / H0 / 10 pc) for redshift `z`
/// and `h0_km_s_mpc` (km/s/Mpc). Linear Hubble law (Hubble 1929): good to
/// about 1 % in distance for z ≤ 0.02 and too short by about (1 − q0) z / 2
/// beyond. Refuses z ≤ 0.
pub fn hubble_distance_modulus(z: f64, h0_km_s_mpc: f64) -> Result<f64> {
    if !(z.is_finite() && z > 0.0) {
        return Err(RungError::invalid(
            "redshift",
            format!("{z} must be positive for a Hubble-law distance"),
        ));
    }
    let d_pc = C_KM_S * z / h0_km_s_mpc * 1.0e6;
    Ok(5.0 * (d_pc / 10.0).log10())
}

/// Distance-modulus error from a line-of-sight peculiar velocity dispersion
/// `sigma_v_km_s` at redshift `z`: σ_μ = (5/ln 10) σ_v / (c z), mag
/// (first-order propagation of d = c z / H0; common practice).
pub fn peculiar_sigma_mu(z: f64, sigma_v_km_s: f64) -> f64 {
    5.0 / LN_10 * sigma_v_km_s / (C_KM_S * z)
}

/// Fractional distance error from a distance-modulus error: σ_d/d = (ln 10/5) σ_μ
/// (from m − M = 5 log10(d/10 pc); first order).
pub fn fractional_distance_error(sigma_mu_mag: f64) -> f64 {
    LN_10 / 5.0 * sigma_mu_mag
}

impl TemplateParams {
    /// Decline time scale T (rest-frame days) for which Δm(15 d) = `dm15`, or
    /// `None` when the template cannot decline that fast (or `dm15` ≤ 0).
    pub fn decline_scale_days(&self, dm15: f64) -> Option<f64> {
        let a = self.knee_mag + 15.0 * self.tail_slope_mag_per_day;
        let r = dm15 / a;
        if !(r > 0.0 && r < 1.0) {
            return None;
        }
        Some(15.0 / (-(1.0 - r).ln()).sqrt())
    }

    /// Magnitudes below peak at rest-frame phase `tau_rest_d` (days from maximum)
    /// for decline rate `dm15` (mag). `None` before the explosion or for a
    /// decline rate the template cannot follow. The project's own approximation
    /// (see the type's documentation); it follows a normal event to a few
    /// tenths of a magnitude, not better.
    pub fn delta_mag(&self, tau_rest_d: f64, dm15: f64) -> Option<f64> {
        if tau_rest_d < 0.0 {
            let x = 1.0 + tau_rest_d / self.rise_days;
            if x <= 0.0 {
                return None;
            }
            Some(-5.0 * x.log10() + 5.0 / LN_10 * (x - 1.0))
        } else {
            let t = self.decline_scale_days(dm15)?;
            let g = 1.0 - (-(tau_rest_d / t).powi(2)).exp();
            Some((self.knee_mag + self.tail_slope_mag_per_day * tau_rest_d) * g)
        }
    }

    /// The rest-frame phase (days, negative) on the rise at which the
    /// supernova is `dm` magnitudes below peak (bisection to 1e-6 d); `None`
    /// for `dm` ≤ 0.
    pub fn rise_phase_for(&self, dm: f64) -> Option<f64> {
        if !(dm > 0.0 && dm.is_finite()) {
            return None;
        }
        let (mut lo, mut hi) = (-self.rise_days * (1.0 - 1e-12), 0.0_f64);
        // delta_mag falls monotonically from +inf at lo to 0 at hi.
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            let v = self.delta_mag(mid, 1.0).unwrap_or(f64::INFINITY);
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
}

/// The three parameters of a light curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CurveParams {
    /// Time of maximum, MJD (UTC).
    pub t_max_mjd: f64,
    /// Apparent peak magnitude in the template's band, mag.
    pub m_max: f64,
    /// Decline rate, mag in 15 rest-frame days.
    pub dm15: f64,
}

impl CurveParams {
    /// As an array (t_max_mjd, m_max, dm15), the Fisher-matrix order.
    pub fn as_array(&self) -> [f64; 3] {
        [self.t_max_mjd, self.m_max, self.dm15]
    }
    /// From an array (t_max_mjd, m_max, dm15).
    pub fn from_array(p: [f64; 3]) -> Self {
        CurveParams {
            t_max_mjd: p[0],
            m_max: p[1],
            dm15: p[2],
        }
    }
}

/// Apparent magnitude at `t_mjd` (MJD, UTC) of a light curve with parameters
/// `p` at redshift `z` (time dilation: rest-frame phase = observed days / (1 + z)).
/// `None` before the explosion. Template: [`TemplateParams::delta_mag`].
pub fn curve_mag(tp: &TemplateParams, z: f64, p: &CurveParams, t_mjd: f64) -> Option<f64> {
    let tau = (t_mjd - p.t_max_mjd) / (1.0 + z);
    tp.delta_mag(tau, p.dm15).map(|d| p.m_max + d)
}

/// Derivatives of the magnitude at `t_mjd` with respect to (t_max, m_max,
/// dm15), by central differences (steps 1e-4 d and 1e-4 mag; the template is
/// smooth, so the error is below 1e-7 relative). `None` when the curve is not
/// defined there or nearby.
pub fn curve_gradient(
    tp: &TemplateParams,
    z: f64,
    p: &CurveParams,
    t_mjd: f64,
) -> Option<[f64; 3]> {
    let h = [1e-4, 1e-4, 1e-4];
    let mut g = [0.0; 3];
    for (k, gk) in g.iter_mut().enumerate() {
        let mut a = p.as_array();
        let mut b = p.as_array();
        a[k] += h[k];
        b[k] -= h[k];
        let fa = curve_mag(tp, z, &CurveParams::from_array(a), t_mjd)?;
        let fb = curve_mag(tp, z, &CurveParams::from_array(b), t_mjd)?;
        *gk = (fa - fb) / (2.0 * h[k]);
    }
    Some(g)
}

/// Precision of the light-curve parameters from a set of epochs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FitPrecision {
    /// σ of the time of maximum, days.
    pub sigma_tmax_d: f64,
    /// σ of the peak magnitude, mag.
    pub sigma_peak_mag: f64,
    /// σ of Δm15, mag.
    pub sigma_dm15: f64,
    /// Full covariance, order (t_max, m_max, dm15).
    pub covariance: [[f64; 3]; 3],
}

/// Fisher-matrix precision of (t_max, m_max, Δm15) from epochs at `times_mjd`
/// with per-epoch magnitude errors `sigmas_mag` (Gaussian, independent):
/// F = Σ ∇m ∇mᵀ / σ², covariance F⁻¹ (the Cramér–Rao bound, reached by a
/// least-squares fit when the errors are small against the curvature of the
/// model; Fisher 1925). Epochs where the template is undefined are skipped.
/// `None` when the epochs do not constrain all three parameters.
pub fn fisher_precision(
    tp: &TemplateParams,
    z: f64,
    p: &CurveParams,
    times_mjd: &[f64],
    sigmas_mag: &[f64],
) -> Option<FitPrecision> {
    let mut f = [[0.0; 3]; 3];
    let mut n = 0;
    for (t, s) in times_mjd.iter().zip(sigmas_mag) {
        if !(*s > 0.0 && s.is_finite()) {
            continue;
        }
        let Some(g) = curve_gradient(tp, z, p, *t) else {
            continue;
        };
        n += 1;
        let w = 1.0 / (s * s);
        for i in 0..3 {
            for j in 0..3 {
                f[i][j] += w * g[i] * g[j];
            }
        }
    }
    if n < 3 {
        return None;
    }
    let c = crate::linalg::spd_inverse_n(&f).ok()?;
    if c[0][0] <= 0.0 || c[1][1] <= 0.0 || c[2][2] <= 0.0 {
        return None;
    }
    Some(FitPrecision {
        sigma_tmax_d: c[0][0].sqrt(),
        sigma_peak_mag: c[1][1].sqrt(),
        sigma_dm15: c[2][2].sqrt(),
        covariance: c,
    })
}

/// The error budget of the distance modulus.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DistanceBudget {
    /// Total σ_μ, mag.
    pub sigma_mu_mag: f64,
    /// From the light-curve fit: σ² = C_mm + b² C_dd − 2 b C_md, mag.
    pub sigma_mu_phot_mag: f64,
    /// Intrinsic scatter, mag.
    pub sigma_int_mag: f64,
    /// Extinction, mag.
    pub sigma_extinction_mag: f64,
    /// Peculiar velocity, mag (`None` without a redshift).
    pub sigma_pec_mag: Option<f64>,
    /// What no amount of photometry removes (intrinsic, extinction, peculiar), mag.
    pub sigma_mu_floor_mag: f64,
    /// σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// σ_d/d of the floor, percent.
    pub floor_pct: f64,
}

impl DistanceBudget {
    /// The budget's terms for the shared [`Prediction`] face; they add in
    /// quadrature to `sigma_mu_mag`.
    pub fn error_terms(&self) -> Vec<crate::ladder::ErrorTerm> {
        use crate::ladder::ErrorTerm;
        let mut v = vec![
            ErrorTerm::from_mag("light-curve fit", self.sigma_mu_phot_mag, false),
            ErrorTerm::from_mag("intrinsic scatter", self.sigma_int_mag, false),
            ErrorTerm::from_mag("extinction", self.sigma_extinction_mag, false),
        ];
        if let Some(p) = self.sigma_pec_mag {
            v.push(ErrorTerm::from_mag("peculiar velocity", p, false));
        }
        v
    }
}

/// The floor of the distance modulus error (mag) at redshift `z` (none: no
/// peculiar-velocity term) with foreground extinction `extinction_mag` (mag):
/// the intrinsic scatter of standardized peaks (Phillips et al. 1999, config),
/// the extinction uncertainty (config) and the peculiar-velocity term
/// [`peculiar_sigma_mu`], in quadrature. What no amount of photometry removes.
pub fn floor_sigma_mu(cfg: &TransientConfig, z: Option<f64>, extinction_mag: f64) -> f64 {
    let (si, se, sp) = floor_terms(cfg, z, extinction_mag);
    (si * si + se * se + sp.unwrap_or(0.0).powi(2)).sqrt()
}

fn floor_terms(cfg: &TransientConfig, z: Option<f64>, a: f64) -> (f64, f64, Option<f64>) {
    let si = cfg.standardization.sigma_int_mag;
    let e = &cfg.extinction;
    let se = ((e.sigma_fraction * a).powi(2) + e.host_sigma_mag.powi(2)).sqrt();
    let sp = z
        .filter(|z| *z > 0.0)
        .map(|z| peculiar_sigma_mu(z, cfg.cosmology.sigma_v_km_s));
    (si, se, sp)
}

/// Distance budget: μ = m_max − A − [M0 + b (Δm15 − Δm15_ref)] (Phillips et al.
/// 1999), with the light-curve covariance `fit`, intrinsic scatter,
/// extinction uncertainty and the peculiar-velocity term at redshift `z`, all
/// in quadrature; σ_d/d = (ln 10/5) σ_μ.
pub fn distance_budget(
    cfg: &TransientConfig,
    fit: &FitPrecision,
    z: Option<f64>,
    extinction_mag: f64,
) -> DistanceBudget {
    let b = cfg.standardization.slope_b;
    let c = &fit.covariance;
    let var_phot = (c[1][1] + b * b * c[2][2] - 2.0 * b * c[1][2]).max(0.0);
    let (si, se, sp) = floor_terms(cfg, z, extinction_mag);
    let floor2 = si * si + se * se + sp.unwrap_or(0.0).powi(2);
    let total = (var_phot + floor2).sqrt();
    DistanceBudget {
        sigma_mu_mag: total,
        sigma_mu_phot_mag: var_phot.sqrt(),
        sigma_int_mag: si,
        sigma_extinction_mag: se,
        sigma_pec_mag: sp,
        sigma_mu_floor_mag: floor2.sqrt(),
        distance_precision_pct: 100.0 * fractional_distance_error(total),
        floor_pct: 100.0 * fractional_distance_error(floor2.sqrt()),
    }
}

/// How the template was placed on the sky.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Placement {
    /// The parameters.
    pub params: CurveParams,
    /// Redshift used for time dilation (0 when unknown).
    pub z: f64,
    /// Peak expected from the Hubble law and the standardization, when a redshift is known.
    pub hubble_peak_mag: Option<f64>,
    /// How the peak and its time were found, for the observer.
    pub how: String,
}

/// Check a band name: one of the photometric bands, and the one the template
/// and the standardization are defined for.
pub fn check_band(cfg: &TransientConfig, band: &str) -> Result<()> {
    if !BANDS.contains(&band) {
        return Err(RungError::Unknown {
            what: "band".into(),
            name: band.into(),
            hint: format!("; known: {}", BANDS.join(", ")),
        });
    }
    if band != cfg.standardization.band {
        return Err(RungError::invalid(
            "band",
            format!(
                "{band}: the light-curve template and the decline-rate standardization are defined for {} only (config/transient.toml, [standardization] band)",
                cfg.standardization.band
            ),
        ));
    }
    Ok(())
}

/// Place the template for a transient target with an assumed decline rate
/// `dm15`: the peak from `peak_mag`, else from the Hubble law at `redshift`
/// with the standardization and the foreground extinction, else from the
/// discovery magnitude at the configured discovery phase; the time of
/// maximum from the discovery magnitude on the rise when it is fainter than
/// the peak, else from the configured discovery phase. Magnitudes in the
/// target's band, times MJD (UTC). Accuracy: that of the template (a few
/// tenths of a magnitude, so a few days in the time of maximum when placed
/// from the rise) and, for the Hubble-law peak, the intrinsic scatter plus
/// the peculiar-velocity term.
pub fn place_curve(cfg: &TransientConfig, target: &Target, dm15: f64) -> Result<Placement> {
    let tp = &cfg.template;
    let disc = target.discovered.ok_or_else(|| {
        RungError::invalid(
            "discovered",
            format!("target {} has no discovery time", target.name),
        )
    })?;
    let z_opt = target.redshift;
    crate::bounds::REDSHIFT.check_opt_as("redshift", z_opt)?;
    let z = z_opt.unwrap_or(0.0);
    let t_disc = disc.mjd_utc();
    let hubble_peak_mag = match z_opt {
        Some(z) if z > 0.0 => Some(
            cfg.standardization.peak_abs_mag(dm15)
                + hubble_distance_modulus(z, cfg.cosmology.h0_km_s_mpc)?
                + target.extinction_mag,
        ),
        _ => None,
    };
    let phase0 = cfg.planning.discovery_phase_days;
    let (m_max, mut how) = match (target.peak_mag, hubble_peak_mag, target.mag_now) {
        (Some(p), _, _) => (p, format!("peak {p:.2} mag as given")),
        (None, Some(h), _) => (
            h,
            format!(
                "peak {h:.2} mag from the Hubble law at z = {z} (H0 = {}) and the standardization",
                cfg.cosmology.h0_km_s_mpc
            ),
        ),
        (None, None, Some(m)) => {
            let d = tp.delta_mag(phase0, dm15).ok_or_else(|| {
                RungError::invalid("discovery_phase_days", "outside the template")
            })?;
            (
                m - d,
                format!(
                    "peak {:.2} mag from the discovery magnitude assuming discovery at {phase0} d from maximum",
                    m - d
                ),
            )
        }
        (None, None, None) => {
            return Err(RungError::invalid(
                "peak_mag",
                format!(
                    "target {} needs peak_mag, mag_now or redshift to place its light curve",
                    target.name
                ),
            ));
        }
    };
    let phase = match target.mag_now {
        Some(m) if target.peak_mag.is_some() || hubble_peak_mag.is_some() => {
            if m > m_max + 0.02 {
                let ph = tp.rise_phase_for(m - m_max).unwrap_or(phase0);
                how.push_str(&format!(
                    "; discovered {:.2} mag below peak, on the rise {:.1} rest-frame days before maximum",
                    m - m_max,
                    -ph
                ));
                ph
            } else {
                how.push_str(
                    "; the discovery magnitude is at or above the peak: maximum taken at discovery (it may already be past)",
                );
                0.0
            }
        }
        Some(_) => phase0,
        None => {
            how.push_str(&format!(
                "; no discovery magnitude: discovery assumed {phase0} rest-frame days from maximum"
            ));
            phase0
        }
    };
    Ok(Placement {
        params: CurveParams {
            t_max_mjd: t_disc - phase * (1.0 + z),
            m_max,
            dm15,
        },
        z,
        hubble_peak_mag,
        how,
    })
}

/// One night of the chase.
#[derive(Debug, Clone, PartialEq)]
pub struct ChaseNight {
    /// The local date whose evening starts the night.
    pub night: NaiveDate,
    /// Start of the longest observable window (after discovery and `now`).
    pub window_start: Option<Instant>,
    /// End of that window.
    pub window_end: Option<Instant>,
    /// Observable time in all windows, hours.
    pub observable_hours: f64,
    /// Planned mid-exposure instant (highest point in the window).
    pub epoch_time: Option<Instant>,
    /// Airmass then.
    pub best_airmass: Option<f64>,
    /// Moon–target separation then (or at local midnight without a window), degrees.
    pub moon_separation_deg: f64,
    /// Moon illuminated fraction then, 0–1.
    pub moon_illumination: f64,
    /// Moon altitude then, degrees.
    pub moon_altitude_deg: f64,
    /// Sun–target separation (solar elongation) then, degrees.
    pub solar_elongation_deg: f64,
    /// Rest-frame days from the predicted maximum at the epoch.
    pub phase_days: Option<f64>,
    /// Expected magnitude at the epoch.
    pub expected_mag: Option<f64>,
    /// Exposure needed for the SNR goal, s.
    pub exptime_s: Option<f64>,
    /// Sub-exposures.
    pub n_exposures: Option<u32>,
    /// Visit length with overheads, s.
    pub visit_s: Option<f64>,
    /// Whether an epoch can be taken this night.
    pub usable: bool,
    /// Why not, when it cannot.
    pub reason: Option<String>,
    /// Sun-proximity cautions at the planned times.
    pub cautions: Vec<String>,
    /// Why the epoch is not at the highest point, when it is not.
    pub epoch_note: Option<String>,
    /// Whether the chosen cadence observes this night.
    pub planned: bool,
}

/// A cadence and what it buys.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CadenceDesign {
    /// Regular spacing, nights.
    pub cadence_days: u32,
    /// Whether every usable night within the dense half-width of maximum is added.
    pub dense_around_max: bool,
    /// Indices into the chase's nights.
    pub nights: Vec<usize>,
    /// The epochs.
    pub epochs: Vec<Epoch>,
    /// Light-curve precision (`None` when the epochs do not fix all three parameters).
    pub fit: Option<FitPrecision>,
    /// Distance budget (`None` without a fit).
    pub budget: Option<DistanceBudget>,
    /// Telescope hours with overheads.
    pub hours_needed: f64,
    /// Whether the design meets the requirement it was chosen for.
    pub meets_goal: bool,
}

/// What the chase plan says.
#[derive(Debug, Clone, PartialEq)]
pub struct Chase {
    /// Target name.
    pub target: String,
    /// Band.
    pub band: String,
    /// The placed light curve.
    pub placement: Placement,
    /// Predicted time of maximum.
    pub t_max: Instant,
    /// SNR asked of each epoch.
    pub snr_goal: f64,
    /// Distance goal, percent.
    pub goal_pct: f64,
    /// The nights from the first to the horizon.
    pub nights: Vec<ChaseNight>,
    /// Last night with an observable window.
    pub last_night: Option<NaiveDate>,
    /// Whether the target is still observable on the last night of the horizon.
    pub observable_at_horizon: bool,
    /// The chosen cadence.
    pub design: CadenceDesign,
    /// Verdict for the distance goal.
    pub verdict: Verdict,
    /// Sun-proximity cautions (all nights).
    pub cautions: Vec<String>,
    /// Explanations.
    pub notes: Vec<String>,
}

/// Knobs of one chase beyond the configuration.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ChaseOptions {
    /// Nothing is planned before this instant (default: the discovery).
    pub now: Option<Instant>,
    /// SNR per epoch (default from config).
    pub snr_goal: Option<f64>,
    /// Decline rate assumed for planning (default from config).
    pub dm15: Option<f64>,
    /// Required σ of the peak magnitude, mag, in addition to the distance goal.
    pub sigma_peak_goal_mag: Option<f64>,
    /// Required σ of Δm15, mag, in addition to the distance goal.
    pub sigma_dm15_goal: Option<f64>,
}

/// The thermonuclear-supernova method.
#[derive(Debug, Clone)]
pub struct TransientMethod {
    /// Coefficients.
    pub cfg: TransientConfig,
    /// Chase knobs.
    pub options: ChaseOptions,
}

/// The night (local date whose evening starts it) that contains instant `t` at `site`.
pub fn night_of(site: &Site, t: Instant) -> NaiveDate {
    crate::astro::night::night_of(site, t)
}

fn per_epoch_sigma(cfg: &TransientConfig, snr: f64) -> f64 {
    (MAG_PER_INV_SNR / snr).hypot(cfg.planning.phot_floor_mag)
}

impl TransientMethod {
    /// The method with the embedded configuration.
    pub fn new() -> Result<Self> {
        Ok(TransientMethod {
            cfg: TransientConfig::embedded()?,
            options: ChaseOptions::default(),
        })
    }

    /// The method with its configuration from the layers of
    /// [`TransientConfig::load`] (built-in, the user's file, then `extra`).
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        Ok(Self::with(
            TransientConfig::load(extra)?,
            ChaseOptions::default(),
        ))
    }

    /// The method with a given configuration and options.
    pub fn with(cfg: TransientConfig, options: ChaseOptions) -> Self {
        TransientMethod { cfg, options }
    }

    fn dm15(&self) -> Result<f64> {
        let d = self.options.dm15.unwrap_or(self.cfg.planning.dm15_prior);
        let s = &self.cfg.standardization;
        if !(d.is_finite() && (s.dm15_min..=s.dm15_max).contains(&d)) {
            return Err(RungError::invalid(
                "dm15",
                format!(
                    "{d} is outside the range {}..{} mag the standardization is used for",
                    s.dm15_min, s.dm15_max
                ),
            ));
        }
        Ok(d)
    }

    fn snr_goal(&self) -> Result<f64> {
        let s = self.options.snr_goal.unwrap_or(self.cfg.planning.snr_goal);
        if !(s.is_finite() && (2.0..=10_000.0).contains(&s)) {
            return Err(RungError::invalid(
                "snr",
                format!("{s} is not within 2..10000"),
            ));
        }
        Ok(s)
    }

    fn check_target(&self, s: &Setting) -> Result<()> {
        let t = s.target;
        if t.kind != Kind::Transient {
            return Err(RungError::invalid(
                "target",
                format!(
                    "{} is a {} target, not a transient",
                    t.name,
                    t.kind.as_str()
                ),
            ));
        }
        check_band(&self.cfg, &t.band)?;
        if let (Some(now), Some(d)) = (self.options.now, t.discovered)
            && d.seconds_since(&now) > 0.0
        {
            return Err(RungError::invalid(
                "discovered",
                format!(
                    "{} of {} is after now ({}): a discovery cannot be in the future",
                    d.iso(),
                    t.name,
                    now.iso()
                ),
            ));
        }
        Ok(())
    }

    /// One night of the chase: window after `not_before`, the epoch at the
    /// highest point in the longest window, its magnitude and exposure.
    #[allow(clippy::too_many_arguments)]
    fn night_row(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        place: &CatalogPlace,
        pl: &Placement,
        snr: f64,
        not_before: Instant,
        date: NaiveDate,
    ) -> Result<ChaseNight> {
        let site = s.site;
        let night = Night::shared(site, date)?;
        let tn = night.windows(place, &s.limits);
        let windows: Vec<(Instant, Instant)> = tn
            .windows
            .iter()
            .filter(|w| w.1.seconds_since(&not_before) > 0.0)
            .map(|w| {
                if w.0.seconds_since(&not_before) < 0.0 {
                    (not_before, w.1)
                } else {
                    *w
                }
            })
            .collect();
        let hours: f64 = windows
            .iter()
            .map(|w| w.1.seconds_since(&w.0) / 3600.0)
            .sum();
        let main = windows.iter().copied().max_by(|a, b| {
            a.1.seconds_since(&a.0)
                .partial_cmp(&b.1.seconds_since(&b.0))
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        let mut row = ChaseNight {
            night: date,
            window_start: main.map(|w| w.0),
            window_end: main.map(|w| w.1),
            observable_hours: hours,
            epoch_time: None,
            best_airmass: None,
            moon_separation_deg: f64::NAN,
            moon_illumination: f64::NAN,
            moon_altitude_deg: f64::NAN,
            solar_elongation_deg: f64::NAN,
            phase_days: None,
            expected_mag: None,
            exptime_s: None,
            n_exposures: None,
            visit_s: None,
            usable: false,
            reason: None,
            cautions: Vec::new(),
            epoch_note: None,
            planned: false,
        };
        let Some((ws, we)) = main else {
            let mid = night
                .start
                .add_seconds(night.end.seconds_since(&night.start) / 2.0);
            let p = pointing(site, &night.context(mid), place);
            row.moon_separation_deg = p.moon_separation_deg;
            row.moon_illumination = p.moon_illumination;
            row.moon_altitude_deg = p.moon_altitude_deg;
            row.solar_elongation_deg = p.sun_separation_deg;
            row.reason = Some(if tn.windows.is_empty() {
                format!(
                    "no window above {:.0}° with the Sun below {:.0}° (solar elongation {:.0}°)",
                    s.limits.min_alt_deg, s.limits.sun_alt_deg, p.sun_separation_deg
                )
            } else {
                "the night's window is over before discovery (or now)".to_string()
            });
            return Ok(row);
        };
        let t = match tn.max_altitude_time {
            Some(tm) if tm.seconds_since(&ws) >= 0.0 && we.seconds_since(&tm) >= 0.0 => tm,
            Some(tm) if tm.seconds_since(&ws) < 0.0 => ws,
            Some(_) => we,
            None => ws.add_seconds(we.seconds_since(&ws) / 2.0),
        };
        // The highest point first; when the exposure model refuses it (for
        // example an airmass rule at the zenith), 30 min either side.
        let clamp = |x: Instant| {
            if x.seconds_since(&ws) < 0.0 {
                ws
            } else if we.seconds_since(&x) < 0.0 {
                we
            } else {
                x
            }
        };
        let tries = [
            t,
            clamp(t.add_seconds(-1800.0)),
            clamp(t.add_seconds(1800.0)),
        ];
        let mut first_err: Option<String> = None;
        let mut found: Option<(Instant, f64, (f64, u32))> = None;
        for (k, tt) in tries.iter().enumerate() {
            if k > 0 && tries[..k].contains(tt) {
                continue;
            }
            let ctx = night.context(*tt);
            let p = pointing(site, &ctx, place);
            let t_mjd = tt.mjd_utc();
            row.epoch_time = Some(*tt);
            row.best_airmass = p.airmass;
            row.moon_separation_deg = p.moon_separation_deg;
            row.moon_illumination = p.moon_illumination;
            row.moon_altitude_deg = p.moon_altitude_deg;
            row.solar_elongation_deg = p.sun_separation_deg;
            row.phase_days = Some((t_mjd - pl.params.t_max_mjd) / (1.0 + pl.z));
            let Some(mag) = curve_mag(&self.cfg.template, pl.z, &pl.params, t_mjd) else {
                row.reason = Some("before the predicted explosion".into());
                return Ok(row);
            };
            row.expected_mag = Some(mag);
            match em.exptime(mag, &s.target.band, snr, &ctx, place) {
                Ok(v) => {
                    found = Some((*tt, mag, v));
                    break;
                }
                Err(e) => {
                    first_err.get_or_insert_with(|| format!("no exposure for {mag:.1} mag: {e}"));
                }
            }
        }
        let Some((t, mag, (exptime, n))) = found else {
            row.reason = first_err;
            return Ok(row);
        };
        if let Some(e) = first_err {
            row.epoch_note = Some(format!(
                "epoch moved 30 min from the highest point, where the exposure model refused ({e})"
            ));
        }
        let visit = em.visit_overhead_s() + exptime + n as f64 * em.readout_s();
        row.exptime_s = Some(exptime);
        row.n_exposures = Some(n);
        row.visit_s = Some(visit);
        let win_s = we.seconds_since(&ws);
        if !exptime.is_finite() || exptime > self.cfg.planning.max_exptime_s {
            row.reason = Some(format!(
                "{mag:.1} mag needs {exptime:.0} s for SNR {snr:.0}, more than the {:.0} s allowed per epoch",
                self.cfg.planning.max_exptime_s
            ));
        } else if visit > win_s {
            row.reason = Some(format!(
                "the visit ({:.0} min) does not fit the window ({:.0} min)",
                visit / 60.0,
                win_s / 60.0
            ));
        } else {
            row.usable = true;
        }
        // Sun proximity at the start, middle and end of the visit, clamped to the window.
        let t0 = t.add_seconds(-visit / 2.0);
        let t0 = if t0.seconds_since(&ws) < 0.0 { ws } else { t0 };
        let t1 = t.add_seconds(visit / 2.0);
        let t1 = if we.seconds_since(&t1) < 0.0 { we } else { t1 };
        for tt in [t0, t, t1] {
            let pp = pointing(site, &night.context(tt), place);
            if let Some(c) = sun_caution(site, &pp) {
                row.cautions.push(format!("{} ({}): {c}", date, tt.iso()));
                break;
            }
        }
        Ok(row)
    }

    /// Epochs of the usable nights at `idx`.
    fn epochs_of(&self, nights: &[ChaseNight], idx: &[usize], snr: f64) -> Vec<Epoch> {
        let band = &self.cfg.standardization.band;
        idx.iter()
            .filter_map(|i| {
                let n = &nights[*i];
                Some(Epoch {
                    time: n.epoch_time?,
                    exptime_s: n.exptime_s?,
                    n_exposures: n.n_exposures?,
                    snr,
                    airmass: n.best_airmass.unwrap_or(f64::NAN),
                    visit_s: n.visit_s?,
                    exposures: crate::ladder::BandExposure::single(
                        band,
                        n.exptime_s?,
                        n.n_exposures?,
                        snr,
                    ),
                })
            })
            .collect()
    }

    /// Precision, budget and hours of a set of epochs.
    fn evaluate(
        &self,
        pl: &Placement,
        z: Option<f64>,
        a_mag: f64,
        epochs: &[Epoch],
    ) -> (Option<FitPrecision>, Option<DistanceBudget>, f64) {
        let times: Vec<f64> = epochs.iter().map(|e| e.time.mjd_utc()).collect();
        let sig: Vec<f64> = epochs
            .iter()
            .map(|e| per_epoch_sigma(&self.cfg, e.snr.max(1e-6)))
            .collect();
        let fit = fisher_precision(&self.cfg.template, pl.z, &pl.params, &times, &sig);
        let budget = fit.map(|f| distance_budget(&self.cfg, &f, z, a_mag));
        let hours = epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0;
        (fit, budget, hours)
    }

    /// Plan the chase: nights from `s.from` (not before the discovery night)
    /// to `s.to`, the template placed for the assumed Δm15, per-night exposures
    /// from `em` for the SNR goal, and the sparsest cadence (every n nights,
    /// n = 1..max_every_n, with or without a dense run around maximum) that
    /// reaches the distance goal `goal_pct` (or, when the goal lies below the
    /// floor, brings the photometric share under `phot_share_of_floor` of it)
    /// and any σ goals in the options, with the fewest telescope hours.
    pub fn chase(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: Option<f64>,
    ) -> Result<Chase> {
        self.check_target(s)?;
        let cfg = &self.cfg;
        let target = s.target;
        let dm15 = self.dm15()?;
        let snr = self.snr_goal()?;
        let goal = goal_pct
            .or(target.goal_pct)
            .unwrap_or(cfg.planning.default_goal_pct);
        if !(goal.is_finite() && goal > 0.0 && goal <= 100.0) {
            return Err(RungError::invalid(
                "goal",
                format!("{goal} is not a percentage in (0, 100]"),
            ));
        }
        let pl = place_curve(cfg, target, dm15)?;
        let disc = target.discovered.ok_or_else(|| {
            RungError::invalid("discovered", "a transient needs a discovery time")
        })?;
        let not_before = match self.options.now {
            Some(n) if n.seconds_since(&disc) > 0.0 => n,
            _ => disc,
        };
        let first = night_of(s.site, not_before).max(s.from);
        if s.to < first {
            return Err(RungError::invalid(
                "range",
                format!(
                    "the last night {} is before the first night of the chase {first}",
                    s.to
                ),
            ));
        }
        // The chase runs from discovery to the planning horizon, never past it.
        let horizon_end = first + chrono::Duration::days(cfg.planning.horizon_days as i64);
        let last = s.to.min(horizon_end);
        let dates: Vec<NaiveDate> = first.iter_days().take_while(|d| *d <= last).collect();
        let place = target.place();
        let rows: Vec<Result<ChaseNight>> = {
            use rayon::prelude::*;
            dates
                .par_iter()
                .map(|d| self.night_row(s, em, &place, &pl, snr, not_before, *d))
                .collect()
        };
        let mut nights = Vec::with_capacity(rows.len());
        for r in rows {
            nights.push(r?);
        }
        let z = target.redshift.filter(|z| *z > 0.0);
        let a_mag = target.extinction_mag;
        let mut notes = vec![format!("light curve: {}", pl.how)];
        notes.push(format!(
            "template: this project's own approximation (rise {} d, Δm15 {dm15} assumed); magnitudes are good to a few tenths",
            cfg.template.rise_days
        ));
        if let Some(h) = pl.hubble_peak_mag
            && target.peak_mag.is_some_and(|p| (p - h).abs() > 1.0)
        {
            notes.push(format!(
                "the given peak differs from the Hubble-law expectation {h:.2} mag by more than 1 mag: extra extinction, a peculiar event, or a wrong redshift"
            ));
        }
        if z.is_none() {
            notes.push(
                "no redshift: the peculiar-velocity term is left out and the distance is relative to the adopted zero point".into(),
            );
        } else if z.is_some_and(|z| z > 0.1) {
            notes.push(
                "z > 0.1: the linear Hubble law used for the expected peak is too short by several per cent".into(),
            );
        }

        // Last observable night.
        let last_idx = nights.iter().rposition(|n| n.window_start.is_some());
        let last_night = last_idx.map(|i| nights[i].night);
        let observable_at_horizon = nights.last().is_some_and(|n| n.window_start.is_some());
        let n_obs = nights.iter().filter(|n| n.window_start.is_some()).count();
        let n_use = nights.iter().filter(|n| n.usable).count();
        let t_max = Instant::from_jd_utc(pl.params.t_max_mjd + 2_400_000.5)?;
        match last_night {
            None => notes.push(format!(
                "not observable on any of the {} nights {} to {}: {}",
                nights.len(),
                first,
                s.to,
                nights
                    .first()
                    .and_then(|n| n.reason.clone())
                    .unwrap_or_default()
            )),
            Some(l) if !observable_at_horizon => notes.push(format!(
                "observable on {n_obs} of {} nights; the last observable night is {l}: after it the Sun takes the target",
                nights.len()
            )),
            Some(_) => notes.push(format!(
                "observable on {n_obs} of {} nights and still observable at the end of the horizon",
                nights.len()
            )),
        }
        if let Some(fi) = nights.iter().position(|n| n.usable)
            && let Some(te) = nights[fi].epoch_time
            && te.mjd_utc() > pl.params.t_max_mjd + 5.0 * (1.0 + pl.z)
        {
            notes.push(format!(
                "the first usable night is {}, {:.0} days after the predicted maximum: the peak is missed",
                nights[fi].night,
                (te.mjd_utc() - pl.params.t_max_mjd) / (1.0 + pl.z)
            ));
        }
        let moved: Vec<&ChaseNight> = nights.iter().filter(|n| n.epoch_note.is_some()).collect();
        if let Some(m) = moved.first() {
            notes.push(format!(
                "{} night(s): {}",
                moved.len(),
                m.epoch_note.clone().unwrap_or_default()
            ));
        }
        if n_use < n_obs {
            notes.push(format!(
                "{} observable night(s) cannot take an epoch (too faint for the exposure limit, or the visit does not fit)",
                n_obs - n_use
            ));
        }
        let t15 = pl.params.t_max_mjd + 15.0 * (1.0 + pl.z);
        if let Some(i) = last_idx
            && let Some(te) = nights[i].epoch_time
            && te.mjd_utc() < t15
        {
            notes.push(if observable_at_horizon {
                "the horizon ends before 15 days after maximum: lengthen it to measure Δm15".to_string()
            } else {
                "the Sun takes the target before 15 days after maximum: Δm15 cannot be measured from these nights".to_string()
            });
        }

        // Requirement.
        let floor = floor_sigma_mu(cfg, z, a_mag);
        let goal_mu = goal / 100.0 / fractional_distance_error(1.0);
        let limited = floor >= goal_mu;
        let need_phot = if limited {
            cfg.planning.phot_share_of_floor * floor
        } else {
            (goal_mu * goal_mu - floor * floor).sqrt()
        };
        let meets = |fit: &Option<FitPrecision>, b: &Option<DistanceBudget>| -> bool {
            match (fit, b) {
                (Some(f), Some(b)) => {
                    b.sigma_mu_phot_mag <= need_phot
                        && self
                            .options
                            .sigma_peak_goal_mag
                            .is_none_or(|g| f.sigma_peak_mag <= g)
                        && self
                            .options
                            .sigma_dm15_goal
                            .is_none_or(|g| f.sigma_dm15 <= g)
                }
                _ => false,
            }
        };

        // Candidate cadences.
        let usable: Vec<usize> = (0..nights.len()).filter(|i| nights[*i].usable).collect();
        let dense_w = cfg.planning.dense_half_width_days;
        let mut best: Option<CadenceDesign> = None;
        let mut fallback: Option<CadenceDesign> = None;
        for n in 1..=cfg.planning.max_every_n {
            for dense in [false, true] {
                if dense && n == 1 {
                    continue;
                }
                let mut idx: Vec<usize> = Vec::new();
                let mut next: Option<NaiveDate> = None;
                for &i in &usable {
                    if next.is_none_or(|d| nights[i].night >= d) {
                        idx.push(i);
                        next = Some(nights[i].night + Duration::days(n as i64));
                    }
                }
                if dense {
                    for &i in &usable {
                        if let Some(t) = nights[i].epoch_time
                            && (t.mjd_utc() - pl.params.t_max_mjd).abs() <= dense_w
                            && !idx.contains(&i)
                        {
                            idx.push(i);
                        }
                    }
                    idx.sort_unstable();
                }
                let epochs = self.epochs_of(&nights, &idx, snr);
                let (fit, budget, hours) = self.evaluate(&pl, z, a_mag, &epochs);
                let ok = meets(&fit, &budget);
                let d = CadenceDesign {
                    cadence_days: n,
                    dense_around_max: dense,
                    nights: idx,
                    epochs,
                    fit,
                    budget,
                    hours_needed: hours,
                    meets_goal: ok,
                };
                if n == 1 {
                    fallback = Some(d.clone());
                }
                if ok
                    && best.as_ref().is_none_or(|b| {
                        d.hours_needed < b.hours_needed - 1e-9
                            || (d.hours_needed <= b.hours_needed + 1e-9
                                && d.epochs.len() < b.epochs.len())
                    })
                {
                    best = Some(d);
                }
            }
        }
        let design = best.or(fallback).unwrap_or(CadenceDesign {
            cadence_days: 1,
            dense_around_max: false,
            nights: Vec::new(),
            epochs: Vec::new(),
            fit: None,
            budget: None,
            hours_needed: 0.0,
            meets_goal: false,
        });
        for &i in &design.nights {
            nights[i].planned = true;
        }
        let floor_pct = 100.0 * fractional_distance_error(floor);
        let verdict = match (&design.budget, design.meets_goal) {
            (None, _) => {
                notes.push(if usable.len() < 3 {
                    format!(
                        "only {} usable night(s): too few to measure the time of maximum, the peak and Δm15",
                        usable.len()
                    )
                } else {
                    "the usable nights do not constrain the time of maximum, the peak and Δm15 together (they must bracket maximum and reach well into the decline)".into()
                });
                Verdict::NotObservable { when: None }
            }
            (Some(_), true) if limited => {
                notes.push(format!(
                    "the goal {goal}% is below the floor {floor_pct:.1}% set by the intrinsic scatter, extinction and peculiar velocity; the cadence is sized so photometry adds at most {:.0}% of the floor",
                    100.0 * cfg.planning.phot_share_of_floor
                ));
                Verdict::LimitedByFloor { floor_pct }
            }
            (Some(_), true) => Verdict::Reachable,
            (Some(b), false) => {
                let f = design.fit.as_ref();
                notes.push(format!(
                    "even an epoch on every usable night reaches only {:.1}% (goal {goal}%){}{}: the usable nights are too few, too late or too shallow (a higher --snr may help when they are well placed)",
                    b.distance_precision_pct,
                    match (self.options.sigma_peak_goal_mag, f) {
                        (Some(g), Some(f)) if f.sigma_peak_mag > g => format!(
                            ", σ(peak) {:.3} mag (asked {g})",
                            f.sigma_peak_mag
                        ),
                        _ => String::new(),
                    },
                    match (self.options.sigma_dm15_goal, f) {
                        (Some(g), Some(f)) if f.sigma_dm15 > g =>
                            format!(", σ(Δm15) {:.3} mag (asked {g})", f.sigma_dm15),
                        _ => String::new(),
                    }
                ));
                if limited && b.sigma_mu_mag <= 1.25 * b.sigma_mu_floor_mag {
                    Verdict::LimitedByFloor { floor_pct }
                } else {
                    Verdict::NotObservable {
                        when: Some(format!(
                            "only with more or deeper epochs than the {} usable nights allow",
                            usable.len()
                        )),
                    }
                }
            }
        };
        if design.meets_goal && design.cadence_days == cfg.planning.max_every_n {
            notes.push(format!(
                "the sparsest cadence tried (every {} nights, config planning.max_every_n) already suffices; keep a few extra epochs against weather",
                design.cadence_days
            ));
        }
        if design.dense_around_max {
            notes.push(format!(
                "a run on every usable night within ±{dense_w} d of maximum pays: it reaches the goal with fewer hours than any regular cadence"
            ));
        }
        let mut cautions: Vec<String> = nights
            .iter()
            .filter(|n| n.planned)
            .flat_map(|n| n.cautions.clone())
            .collect();
        let other = nights
            .iter()
            .filter(|n| !n.planned && !n.cautions.is_empty())
            .count();
        if other > 0 {
            cautions.push(format!(
                "{other} further night(s) not in the cadence would also point within {:.0}° of the Sun while it is up",
                s.site.sun_avoid_deg
            ));
        }
        if !cautions.is_empty() {
            notes.push(
                "the observatory's own operating rules and safety officers prevail over this plan"
                    .into(),
            );
        }
        Ok(Chase {
            target: target.name.clone(),
            band: target.band.clone(),
            placement: pl,
            t_max,
            snr_goal: snr,
            goal_pct: goal,
            nights,
            last_night,
            observable_at_horizon,
            design,
            verdict,
            cautions,
            notes,
        })
    }
}

impl Chase {
    /// The chase as the shared [`Prediction`].
    pub fn prediction(&self) -> Prediction {
        Prediction {
            kind: Kind::Transient,
            epochs: self.design.epochs.clone(),
            distance_precision_pct: self
                .design
                .budget
                .map(|b| b.distance_precision_pct)
                .unwrap_or(f64::INFINITY),
            hours_needed: self.design.hours_needed,
            verdict: self.verdict.clone(),
            notes: self
                .notes
                .iter()
                .chain(self.cautions.iter())
                .cloned()
                .collect(),
            error_terms: self
                .design
                .budget
                .map(|b| b.error_terms())
                .unwrap_or_default(),
        }
    }
}

impl Method for TransientMethod {
    fn kind(&self) -> Kind {
        Kind::Transient
    }

    fn default_goal_pct(&self) -> Option<f64> {
        Some(self.cfg.planning.default_goal_pct)
    }

    fn config_json(&self) -> serde_json::Value {
        serde_json::json!({
            "config": self.cfg,
            "options": format!("{:?}", self.options),
        })
    }

    fn as_any(&self) -> &dyn std::any::Any {
        self
    }

    /// The epochs of the sparsest cadence that reaches the target's goal (or
    /// the configured default goal).
    fn propose(&self, s: &Setting, em: &dyn ExposureModel) -> Result<Vec<Epoch>> {
        Ok(self.chase(s, em, None)?.design.epochs)
    }

    /// Fisher-matrix precision of the given epochs (their times and SNR) on
    /// the template placed for the target, and the distance budget.
    fn predict(
        &self,
        s: &Setting,
        _em: &dyn ExposureModel,
        epochs: &[Epoch],
    ) -> Result<Prediction> {
        self.check_target(s)?;
        let t = s.target;
        let pl = place_curve(&self.cfg, t, self.dm15()?)?;
        let z = t.redshift.filter(|z| *z > 0.0);
        let (fit, budget, hours) = self.evaluate(&pl, z, t.extinction_mag, epochs);
        let mut notes = vec![format!("light curve: {}", pl.how)];
        let pct = budget
            .map(|b| b.distance_precision_pct)
            .unwrap_or(f64::INFINITY);
        let verdict = match (fit, budget, t.goal_pct) {
            (None, _, _) | (_, None, _) => {
                notes.push(
                    "the epochs do not constrain the time of maximum, the peak and Δm15 together"
                        .into(),
                );
                Verdict::NotObservable { when: None }
            }
            (_, Some(_), None) => Verdict::Reachable,
            (_, Some(b), Some(g)) if b.distance_precision_pct <= g => Verdict::Reachable,
            (_, Some(b), Some(g)) if b.floor_pct > g => Verdict::LimitedByFloor {
                floor_pct: b.floor_pct,
            },
            (_, Some(_), Some(_)) => Verdict::NeedsMoreSeasons { seasons: None },
        };
        if let Some(f) = fit {
            notes.push(format!(
                "σ(t_max) {:.2} d, σ(peak) {:.3} mag, σ(Δm15) {:.3} mag",
                f.sigma_tmax_d, f.sigma_peak_mag, f.sigma_dm15
            ));
        }
        Ok(Prediction {
            kind: Kind::Transient,
            epochs: epochs.to_vec(),
            distance_precision_pct: pct,
            hours_needed: hours,
            verdict,
            notes,
            error_terms: budget.map(|b| b.error_terms()).unwrap_or_default(),
        })
    }

    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        Ok(self.chase(s, em, Some(goal_pct))?.prediction())
    }
}

/// Limits a chase uses when none are given: altitude ≥ 30°, Sun below −12°
/// (nautical twilight; a fresh transient is worth the bright edge of the night).
pub fn default_limits() -> Limits {
    Limits {
        min_alt_deg: 30.0,
        sun_alt_deg: -12.0,
    }
}
