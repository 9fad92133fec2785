//! One pulsator's distance modulus and its error budget through the Leavitt law.

use super::{DIST_FRAC_PER_MAG, LeavittLaw};
use serde::Serialize;

/// The distance and its error budget for one pulsator.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DistanceBudget {
    /// Absolute magnitude from the Leavitt law, mag.
    pub abs_mag: f64,
    /// Distance modulus μ = m̄ − M − A, mag.
    pub distance_modulus_mag: f64,
    /// Distance, parsecs: 10^(μ/5 + 1).
    pub distance_pc: f64,
    /// The relation's uncertainty for this star, mag.
    pub sigma_pl_mag: f64,
    /// Mean-magnitude error, mag.
    pub sigma_mean_mag: f64,
    /// Extinction error, mag.
    pub sigma_ext_mag: f64,
    /// σ_μ, mag.
    pub sigma_mu_mag: f64,
    /// σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// The best σ_d/d any number of points could reach (σ_m̄ → 0), percent.
    pub floor_pct: f64,
}

impl DistanceBudget {
    /// The budget's terms for the shared [`Prediction`] face; they add in
    /// quadrature to `sigma_mu_mag`.
    pub fn error_terms(&self) -> Vec<crate::ladder::ErrorTerm> {
        vec![
            crate::ladder::ErrorTerm::from_mag(
                "period–luminosity relation",
                self.sigma_pl_mag,
                false,
            ),
            crate::ladder::ErrorTerm::from_mag("mean magnitude", self.sigma_mean_mag, false),
            crate::ladder::ErrorTerm::from_mag("extinction", self.sigma_ext_mag, false),
        ]
    }
}

/// Distance modulus μ = m̄ − M(P) − A (mag) from the mean magnitude `mean_mag`,
/// the period `period_d` (days) and the extinction `extinction_mag` in the band.
/// Source: the Leavitt law of the band (config) and m − M = 5 log10(d/10 pc).
pub fn distance_modulus(
    mean_mag: f64,
    period_d: f64,
    extinction_mag: f64,
    law: &LeavittLaw,
) -> f64 {
    mean_mag - law.abs_mag(period_d) - extinction_mag
}

/// The error budget: σ_μ² = σ_PL² + σ_m̄² + σ_A², σ_d/d = (ln 10/5) σ_μ.
/// σ_A = `extinction_sigma_frac` × A. Inputs in mag and days; result as
/// [`DistanceBudget`]. Source: SCIENCE.md (Pulsating stars, Distance).
pub fn distance_budget(
    mean_mag: f64,
    period_d: f64,
    extinction_mag: f64,
    sigma_mean_mag: f64,
    law: &LeavittLaw,
    extinction_sigma_frac: f64,
) -> DistanceBudget {
    let mu = distance_modulus(mean_mag, period_d, extinction_mag, law);
    let s_pl = law.sigma_mag(period_d);
    let s_a = extinction_sigma_frac * extinction_mag;
    let s_mu = (s_pl * s_pl + sigma_mean_mag * sigma_mean_mag + s_a * s_a).sqrt();
    DistanceBudget {
        abs_mag: law.abs_mag(period_d),
        distance_modulus_mag: mu,
        distance_pc: 10f64.powf(mu / 5.0 + 1.0),
        sigma_pl_mag: s_pl,
        sigma_mean_mag,
        sigma_ext_mag: s_a,
        sigma_mu_mag: s_mu,
        distance_precision_pct: 100.0 * DIST_FRAC_PER_MAG * s_mu,
        floor_pct: 100.0 * DIST_FRAC_PER_MAG * (s_pl * s_pl + s_a * s_a).sqrt(),
    }
}
