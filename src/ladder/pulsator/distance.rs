//! One pulsator's distance modulus and its error budget through its
//! period–luminosity relation ([`super::relations`]).

use super::{DIST_FRAC_PER_MAG, StarRelation};
use serde::Serialize;

/// The distance and its error budget for one pulsator.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DistanceBudget {
    /// Absolute magnitude from the relation, mag.
    pub abs_mag: f64,
    /// Distance modulus μ = m̄ − M − A, mag (no A for a reddening-free index).
    pub distance_modulus_mag: f64,
    /// Distance, parsecs: 10^(μ/5 + 1).
    pub distance_pc: f64,
    /// The relation's uncertainty for this star, mag: scatter and
    /// calibration in quadrature (the metallicity term apart).
    pub sigma_pl_mag: f64,
    /// The relation's intrinsic scatter σ_PL, mag (each star its own draw).
    pub sigma_scatter_mag: f64,
    /// The relation's calibration (zero point, slope and γ lever arms), mag;
    /// shared by every star calibrated with the relation.
    pub sigma_zero_point_mag: f64,
    /// The metallicity term |γ| σ[Fe/H], mag.
    pub sigma_feh_mag: f64,
    /// Mean-magnitude error, mag.
    pub sigma_mean_mag: f64,
    /// Extinction error, mag (0 for a reddening-free index).
    pub sigma_ext_mag: f64,
    /// The band's photometric calibration floor, mag: common to every point
    /// calibrated the same way, so it does not fall with more points.
    pub sigma_cal_mag: f64,
    /// σ_μ, mag.
    pub sigma_mu_mag: f64,
    /// σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// The best σ_d/d any number of points could reach (σ_m̄ → 0), percent.
    pub floor_pct: f64,
}

impl DistanceBudget {
    /// The budget's terms for the shared [`Prediction`](crate::ladder::Prediction)
    /// face; they add in quadrature to `sigma_mu_mag`. The relation's
    /// calibration is shared by every distance calibrated with it.
    pub fn error_terms(&self) -> Vec<crate::ladder::ErrorTerm> {
        use crate::ladder::ErrorTerm;
        vec![
            ErrorTerm::from_mag("relation scatter", self.sigma_scatter_mag, false),
            ErrorTerm::from_mag("relation zero point", self.sigma_zero_point_mag, true),
            ErrorTerm::from_mag("metallicity", self.sigma_feh_mag, false),
            ErrorTerm::from_mag("mean magnitude", self.sigma_mean_mag, false),
            ErrorTerm::from_mag("extinction", self.sigma_ext_mag, false),
            ErrorTerm::from_mag("calibration", self.sigma_cal_mag, false),
        ]
    }
}

/// Distance modulus μ = m̄ − M(P, [Fe/H]) − A (mag) from the mean magnitude
/// `mean_mag`, the period `period_d` (days) and the extinction
/// `extinction_mag` in the band (ignored by a reddening-free index, whose
/// magnitude has none). Source: the star's relation (config) and
/// m − M = 5 log10(d/10 pc).
pub fn distance_modulus(
    mean_mag: f64,
    period_d: f64,
    extinction_mag: f64,
    rel: &StarRelation,
) -> f64 {
    let a = if rel.relation.reddening_free() {
        0.0
    } else {
        extinction_mag
    };
    mean_mag - rel.abs_mag(period_d) - a
}

/// The error budget: σ_μ² = σ_PL² + σ_zp² + (γ σ[Fe/H])² + σ_m̄² + σ_A² +
/// σ_cal², σ_d/d = (ln 10/5) σ_μ. σ_A = `extinction_sigma_frac` × A (none
/// for a reddening-free index); σ_cal = `calibration_mag`, the band's
/// photometric calibration floor (part of the floor no number of points
/// removes). Inputs in mag and days; result as
/// [`DistanceBudget`]. Source: docs/science.md (Pulsating stars, Distances).
pub fn distance_budget(
    mean_mag: f64,
    period_d: f64,
    extinction_mag: f64,
    sigma_mean_mag: f64,
    rel: &StarRelation,
    extinction_sigma_frac: f64,
    calibration_mag: f64,
) -> DistanceBudget {
    let mu = distance_modulus(mean_mag, period_d, extinction_mag, rel);
    let s_sc = rel.relation.scatter_mag;
    let s_zp = rel.sigma_zero_point_mag(period_d);
    let s_feh = rel.sigma_feh_mag();
    let s_a = if rel.relation.reddening_free() {
        0.0
    } else {
        extinction_sigma_frac * extinction_mag
    };
    let fixed2 =
        s_sc * s_sc + s_zp * s_zp + s_feh * s_feh + s_a * s_a + calibration_mag * calibration_mag;
    let s_mu = (fixed2 + sigma_mean_mag * sigma_mean_mag).sqrt();
    DistanceBudget {
        abs_mag: rel.abs_mag(period_d),
        distance_modulus_mag: mu,
        distance_pc: 10f64.powf(mu / 5.0 + 1.0),
        sigma_pl_mag: (s_sc * s_sc + s_zp * s_zp).sqrt(),
        sigma_scatter_mag: s_sc,
        sigma_zero_point_mag: s_zp,
        sigma_feh_mag: s_feh,
        sigma_mean_mag,
        sigma_ext_mag: s_a,
        sigma_cal_mag: calibration_mag,
        sigma_mu_mag: s_mu,
        distance_precision_pct: 100.0 * DIST_FRAC_PER_MAG * s_mu,
        floor_pct: 100.0 * DIST_FRAC_PER_MAG * fixed2.sqrt(),
    }
}
