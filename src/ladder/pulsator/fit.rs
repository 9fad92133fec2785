//! Light-curve fits: the K-harmonic Fourier series, the mean magnitude's
//! error from a set of phases, and per-point errors from signal-to-noise.

use super::MAG_PER_INV_SNR;
use crate::error::{Result, RungError};
use serde::Serialize;
use std::f64::consts::PI;

/// A weighted least-squares Fourier fit of a light curve,
/// m(φ) = A0 + Σ_{j=1..K} [A_j cos 2πjφ + B_j sin 2πjφ].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FourierFit {
    /// Harmonics K.
    pub harmonics: usize,
    /// Coefficients (A0, A1, B1, A2, B2, …), mag.
    pub coeffs: Vec<f64>,
    /// Covariance of the coefficients, mag², from the point errors given.
    pub covariance: Vec<Vec<f64>>,
    /// χ² of the fit.
    pub chi2: f64,
}

impl FourierFit {
    /// The mean magnitude A0 (the magnitude-mean over phase), mag.
    pub fn mean_mag(&self) -> f64 {
        self.coeffs[0]
    }
    /// 1σ error of A0 from the covariance, mag.
    pub fn mean_mag_sigma(&self) -> f64 {
        self.covariance[0][0].sqrt()
    }
    /// The fitted magnitude at phase `phase`.
    pub fn at(&self, phase: f64) -> f64 {
        dot(&design_row(phase, self.harmonics), &self.coeffs)
    }
}

fn design_row(phase: f64, k: usize) -> Vec<f64> {
    let mut r = Vec::with_capacity(2 * k + 1);
    r.push(1.0);
    for j in 1..=k {
        let x = 2.0 * PI * j as f64 * phase;
        r.push(x.cos());
        r.push(x.sin());
    }
    r
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn check_points(phases: &[f64], sigmas: &[f64], k: usize) -> Result<()> {
    if phases.len() != sigmas.len() {
        return Err(RungError::invalid(
            "light curve",
            "phases and errors differ in number",
        ));
    }
    if k == 0 || k > 20 {
        return Err(RungError::invalid(
            "harmonics",
            format!("{k} is not within 1..20"),
        ));
    }
    if phases.len() < 2 * k + 1 {
        return Err(RungError::invalid(
            "phase points",
            format!(
                "{} points cannot fix a {k}-harmonic Fourier series: at least {} are needed",
                phases.len(),
                2 * k + 1
            ),
        ));
    }
    for (p, s) in phases.iter().zip(sigmas) {
        if !(p.is_finite() && s.is_finite() && *s > 0.0) {
            return Err(RungError::invalid(
                "phase points",
                format!("phase {p} with error {s} mag: phases must be finite and errors positive"),
            ));
        }
    }
    Ok(())
}

#[allow(clippy::needless_range_loop)]
fn normal_matrix(phases: &[f64], sigmas: &[f64], k: usize) -> Result<Vec<Vec<f64>>> {
    check_points(phases, sigmas, k)?;
    let n = 2 * k + 1;
    let mut a = vec![vec![0.0; n]; n];
    for (p, s) in phases.iter().zip(sigmas) {
        let r = design_row(*p, k);
        let w = 1.0 / (s * s);
        for i in 0..n {
            for j in 0..n {
                a[i][j] += w * r[i] * r[j];
            }
        }
    }
    crate::linalg::spd_inverse(&a).map_err(|_| {
        RungError::invalid(
            "phase coverage",
            format!(
                "the phases do not constrain a {k}-harmonic Fourier series (points bunched in phase); spread them over the cycle"
            ),
        )
    })
}

/// Weighted least-squares Fourier fit of K harmonics to magnitudes `mags`
/// (mag) at `phases` (cycles) with 1σ errors `sigmas` (mag).
///
/// Result: coefficients, their covariance (AᵀWA)⁻¹ and χ². Accuracy: exact
/// linear least squares (normal equations, Cholesky). Errors: fewer than
/// 2K + 1 points, non-finite input, or phases too bunched to fix the series.
/// Source: the Fourier decomposition of Cepheid light curves (Simon & Lee
/// 1981, ApJ 248, 291; quoted from memory).
pub fn fourier_fit(phases: &[f64], mags: &[f64], sigmas: &[f64], k: usize) -> Result<FourierFit> {
    if mags.len() != phases.len() || mags.iter().any(|m| !m.is_finite()) {
        return Err(RungError::invalid(
            "light curve",
            "magnitudes must be finite, one per phase",
        ));
    }
    let cov = normal_matrix(phases, sigmas, k)?;
    let n = 2 * k + 1;
    let mut rhs = vec![0.0; n];
    for ((p, m), s) in phases.iter().zip(mags).zip(sigmas) {
        let r = design_row(*p, k);
        for i in 0..n {
            rhs[i] += r[i] * m / (s * s);
        }
    }
    let coeffs: Vec<f64> = (0..n).map(|i| dot(&cov[i], &rhs)).collect();
    let chi2 = phases
        .iter()
        .zip(mags)
        .zip(sigmas)
        .map(|((p, m), s)| ((m - dot(&design_row(*p, k), &coeffs)) / s).powi(2))
        .sum();
    Ok(FourierFit {
        harmonics: k,
        coeffs,
        covariance: cov,
        chi2,
    })
}

/// 1σ error of the fitted mean magnitude A0 (mag) for points at `phases` with
/// errors `sigmas`, from the fit's covariance (no data needed). For N points
/// evenly spread in phase it is σ/√N (the harmonics are orthogonal to the
/// mean); gaps in phase raise it.
pub fn mean_mag_sigma(phases: &[f64], sigmas: &[f64], k: usize) -> Result<f64> {
    Ok(normal_matrix(phases, sigmas, k)?[0][0].sqrt())
}

/// The rule of thumb σ_phot √((2K + 1)/N) (SCIENCE.md, Pulsating stars), mag.
///
/// It is the phase-averaged error of the fitted light curve (the trace of the
/// hat matrix, 2K + 1, shared over N points), which the Monte-Carlo test
/// `tests/pulsator_fit.rs` confirms; for the mean A0 alone it is conservative
/// by √(2K + 1) when phases are well spread. rung reports it beside the
/// covariance value and uses the covariance for distances.
pub fn mean_mag_sigma_rule(sigma_phot: f64, n: usize, k: usize) -> f64 {
    sigma_phot * ((2 * k + 1) as f64 / n as f64).sqrt()
}

/// Per-point magnitude error from a signal-to-noise, σ ≈ 1.0857/SNR (mag;
/// first order in 1/SNR, good to 1 % above SNR 10; Howell, Handbook of CCD
/// Astronomy, quoted from memory).
pub fn sigma_mag_from_snr(snr: f64) -> f64 {
    MAG_PER_INV_SNR / snr
}
