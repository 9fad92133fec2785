//! The precision of a light-curve fit from a set of measurements: the Fisher
//! information of the five template parameters, with the Gaussian prior on
//! the rise time, inverted to their covariance (the Cramér–Rao bound, which a
//! least-squares fit reaches when the errors are small against the model's
//! curvature; Fisher 1925). Checked against simulated fits in
//! tests/transient_fisher.rs.

use super::template::{CurveParams, Model, N_PARAMS};
use serde::Serialize;
use std::f64::consts::LN_10;

/// Magnitude error per unit inverse signal-to-noise, 2.5 / ln 10 ≈ 1.0857:
/// σ_m ≈ 1.0857 / SNR for SNR ≫ 1 (first-order error propagation of
/// m = −2.5 log10 F; common practice).
pub const MAG_PER_INV_SNR: f64 = 2.5 / LN_10;

/// A square matrix of the parameters' size.
pub type Matrix = [[f64; N_PARAMS]; N_PARAMS];

/// One magnitude measurement: when, in which band of the model, how well.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Measurement {
    /// Mid-exposure, MJD (UTC).
    pub t_mjd: f64,
    /// Index of the band in the model.
    pub band: usize,
    /// Total error of the magnitude, mag.
    pub sigma_mag: f64,
}

/// The error of one measurement at signal-to-noise `snr`: photon noise
/// 1.0857/SNR, the photometric floor and the template's mismatch, in quadrature.
pub fn measurement_sigma(snr: f64, phot_floor_mag: f64, model_error_mag: f64) -> f64 {
    (MAG_PER_INV_SNR / snr)
        .hypot(phot_floor_mag)
        .hypot(model_error_mag)
}

/// The Fisher information Σ ∇m ∇mᵀ / σ² of `meas` (Gaussian, independent
/// errors) at parameters `p`; measurements where the curve is undefined, or
/// with a non-positive error, add nothing.
pub fn information(model: &Model, p: &CurveParams, meas: &[Measurement]) -> Matrix {
    let mut f = [[0.0; N_PARAMS]; N_PARAMS];
    for m in meas {
        if !(m.sigma_mag > 0.0 && m.sigma_mag.is_finite()) {
            continue;
        }
        let Some(g) = model.gradient(m.band, p, m.t_mjd) else {
            continue;
        };
        let w = 1.0 / (m.sigma_mag * m.sigma_mag);
        for i in 0..N_PARAMS {
            for j in 0..N_PARAMS {
                f[i][j] += w * g[i] * g[j];
            }
        }
    }
    f
}

/// The prior's information: a Gaussian of σ `rise_sigma_days` on the rise time.
pub fn prior(rise_sigma_days: f64) -> Matrix {
    let mut f = [[0.0; N_PARAMS]; N_PARAMS];
    f[4][4] = 1.0 / (rise_sigma_days * rise_sigma_days);
    f
}

/// The sum of information matrices.
pub fn add(a: &Matrix, b: &Matrix) -> Matrix {
    let mut c = *a;
    for i in 0..N_PARAMS {
        for j in 0..N_PARAMS {
            c[i][j] += b[i][j];
        }
    }
    c
}

/// `a` less `b`.
pub fn sub(a: &Matrix, b: &Matrix) -> Matrix {
    let mut c = *a;
    for i in 0..N_PARAMS {
        for j in 0..N_PARAMS {
            c[i][j] -= b[i][j];
        }
    }
    c
}

/// Precision of the light-curve parameters.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FitPrecision {
    /// σ of the time of maximum, days.
    pub sigma_tmax_d: f64,
    /// σ of the B peak, mag.
    pub sigma_peak_mag: f64,
    /// σ of Δm15, mag.
    pub sigma_dm15: f64,
    /// σ of the colour, mag.
    pub sigma_colour_mag: f64,
    /// σ of the rise time, days.
    pub sigma_rise_d: f64,
    /// Full covariance, order of `template::PARAM_NAMES`.
    pub covariance: Matrix,
}

/// The covariance from an information matrix (with its prior), or `None`
/// when the information does not constrain every parameter.
pub fn precision(info: &Matrix) -> Option<FitPrecision> {
    let c = crate::linalg::spd_inverse_n(info).ok()?;
    if (0..N_PARAMS).any(|i| !(c[i][i] > 0.0 && c[i][i].is_finite())) {
        return None;
    }
    Some(FitPrecision {
        sigma_tmax_d: c[0][0].sqrt(),
        sigma_peak_mag: c[1][1].sqrt(),
        sigma_dm15: c[2][2].sqrt(),
        sigma_colour_mag: c[3][3].sqrt(),
        sigma_rise_d: c[4][4].sqrt(),
        covariance: c,
    })
}

/// Fisher-matrix precision of the five parameters from `meas` with the rise
/// prior of σ `rise_sigma_days`. `None` when the measurements do not fix
/// the time of maximum, the peak, the decline rate and the colour.
pub fn fisher_precision(
    model: &Model,
    p: &CurveParams,
    meas: &[Measurement],
    rise_sigma_days: f64,
) -> Option<FitPrecision> {
    precision(&add(&information(model, p, meas), &prior(rise_sigma_days)))
}

/// σ² of a linear combination gᵀ C g of the parameters.
pub fn variance_of(c: &Matrix, g: &[f64; N_PARAMS]) -> f64 {
    let mut v = 0.0;
    for i in 0..N_PARAMS {
        for j in 0..N_PARAMS {
            v += g[i] * c[i][j] * g[j];
        }
    }
    v.max(0.0)
}
