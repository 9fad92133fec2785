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

/// The normal matrix AᵀWA of a K-harmonic fit, summed point by point in
/// the points' order: the sums of a set of points followed by one more are
/// those of the set with the point added, to the last bit, so a caller
/// weighing one more point at a time keeps the set's sums and adds each.
#[derive(Debug, Clone)]
pub(crate) struct NormalSums {
    k: usize,
    a: Vec<Vec<f64>>,
}

impl NormalSums {
    /// No points yet. `k` must be within 1..20 ([`check_points`] says so
    /// before the sums are inverted).
    pub(crate) fn new(k: usize) -> Self {
        let n = 2 * k.min(20) + 1;
        NormalSums {
            k,
            a: vec![vec![0.0; n]; n],
        }
    }

    /// Adds one point's share: phase `p` (cycles) with error `s` (mag).
    #[allow(clippy::needless_range_loop)]
    pub(crate) fn add(&mut self, p: f64, s: f64) {
        let n = self.a.len();
        let r = design_row(p, (n - 1) / 2);
        let w = 1.0 / (s * s);
        for i in 0..n {
            for j in 0..n {
                self.a[i][j] += w * r[i] * r[j];
            }
        }
    }

    /// The covariance (AᵀWA)⁻¹ of the points summed, which are `phases`
    /// and `sigmas` (checked as [`normal_matrix`] checks them).
    pub(crate) fn covariance(&self, phases: &[f64], sigmas: &[f64]) -> Result<Vec<Vec<f64>>> {
        let k = self.k;
        check_points(phases, sigmas, k)?;
        crate::linalg::spd_inverse(&self.a).map_err(|_| {
            RungError::invalid(
                "phase coverage",
                format!(
                    "the phases do not constrain a {k}-harmonic Fourier series (points bunched in phase); spread them over the cycle"
                ),
            )
        })
    }
}

fn normal_matrix(phases: &[f64], sigmas: &[f64], k: usize) -> Result<Vec<Vec<f64>>> {
    check_points(phases, sigmas, k)?;
    let mut a = NormalSums::new(k);
    for (p, s) in phases.iter().zip(sigmas) {
        a.add(*p, *s);
    }
    a.covariance(phases, sigmas)
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

/// Phases the intensity mean is integrated on: the midpoint rule on a
/// periodic, smooth function converges faster than any power of the step,
/// so 720 phases are exact to far below a micromagnitude for K ≤ 10.
const INTENSITY_PHASES: usize = 720;

/// The intensity-mean magnitude of the light curve with Fourier coefficients
/// `coeffs` (A0, A1, B1, …, as [`FourierFit`]): ⟨m⟩_I = −2.5 log10 ∫₀¹
/// 10^(−0.4 m(φ)) dφ, the mean of the flux expressed as a magnitude — what
/// period–luminosity relations are calibrated on (common practice). It is
/// brighter than the magnitude mean A0 by about (ln 10/5)·a²/… for a
/// sinusoid of semi-amplitude a: exactly A0 − 2.5 log10 I0(0.4 ln 10 · a),
/// I0 the modified Bessel function (tests/pulsator_fit.rs).
pub fn intensity_mean_of(coeffs: &[f64]) -> f64 {
    let k = coeffs.len().saturating_sub(1) / 2;
    let mut f = 0.0;
    for i in 0..INTENSITY_PHASES {
        let ph = (i as f64 + 0.5) / INTENSITY_PHASES as f64;
        f += 10f64.powf(-0.4 * dot(&design_row(ph, k), coeffs));
    }
    -2.5 * (f / INTENSITY_PHASES as f64).log10()
}

/// ∂⟨m⟩_I/∂c_j = ⟨w ψ_j⟩ / ⟨w⟩, w = 10^(−0.4 m(φ)), ψ_j the j-th Fourier
/// term: the intensity mean weighs the bright phases more.
pub fn intensity_mean_gradient(coeffs: &[f64]) -> Vec<f64> {
    let k = coeffs.len().saturating_sub(1) / 2;
    let mut g = vec![0.0; coeffs.len()];
    let mut wsum = 0.0;
    for i in 0..INTENSITY_PHASES {
        let ph = (i as f64 + 0.5) / INTENSITY_PHASES as f64;
        let row = design_row(ph, k);
        let w = 10f64.powf(-0.4 * dot(&row, coeffs));
        wsum += w;
        for (gj, r) in g.iter_mut().zip(&row) {
            *gj += w * r;
        }
    }
    g.iter().map(|x| x / wsum).collect()
}

impl FourierFit {
    /// The intensity-mean magnitude of the fitted curve, mag.
    pub fn intensity_mean_mag(&self) -> f64 {
        intensity_mean_of(&self.coeffs)
    }
    /// Its 1σ error from the coefficients' covariance (first-order
    /// propagation, gᵀ C g), mag.
    pub fn intensity_mean_sigma(&self) -> f64 {
        quad_form(&intensity_mean_gradient(&self.coeffs), &self.covariance).sqrt()
    }
}

fn quad_form(g: &[f64], c: &[Vec<f64>]) -> f64 {
    g.iter().enumerate().map(|(i, gi)| gi * dot(&c[i], g)).sum()
}

/// The light curve rung plans with when only the amplitude is known: a
/// sinusoid of peak-to-peak `amplitude_mag` about `mean_mag`, brightest at
/// phase 0 (m = mean − (A/2) cos 2πφ), as K-harmonic coefficients.
pub fn sinusoid_model(mean_mag: f64, amplitude_mag: f64, k: usize) -> Vec<f64> {
    let mut c = vec![0.0; 2 * k + 1];
    c[0] = mean_mag;
    if k >= 1 {
        c[1] = -amplitude_mag / 2.0;
    }
    c
}

/// 1σ error of the intensity-mean magnitude (mag) that points at `phases`
/// with errors `sigmas` will give through a K-harmonic fit, for a star whose
/// light curve is `model` (coefficients; [`sinusoid_model`] when only the
/// amplitude is known): gᵀ (AᵀWA)⁻¹ g with g the gradient of the intensity
/// mean. Equal to the magnitude mean's error for a constant star.
pub fn intensity_mean_sigma(
    phases: &[f64],
    sigmas: &[f64],
    k: usize,
    model: &[f64],
) -> Result<f64> {
    let cov = normal_matrix(phases, sigmas, k)?;
    Ok(intensity_mean_sigma_of(&cov, &model_gradient(model, k)))
}

/// The gradient [`intensity_mean_sigma`] propagates: that of the intensity
/// mean at `model` taken to K harmonics. It depends on the light curve
/// alone, not on the points, so a caller asking for many sets of points of
/// one star works it out once.
pub(crate) fn model_gradient(model: &[f64], k: usize) -> Vec<f64> {
    let mut m = model.to_vec();
    m.resize(2 * k + 1, 0.0);
    intensity_mean_gradient(&m)
}

/// [`intensity_mean_sigma`] from the points' covariance and the model's
/// gradient ([`model_gradient`]).
pub(crate) fn intensity_mean_sigma_of(cov: &[Vec<f64>], gradient: &[f64]) -> f64 {
    quad_form(gradient, cov).sqrt()
}

/// How a star's mean magnitude comes from its points.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MeanEstimate {
    /// 1σ error of the intensity-mean magnitude from the points, mag
    /// (photometric errors only; the calibration floor is its own term).
    pub sigma_mag: f64,
    /// `"fourier"`: a K-harmonic fit of the points, the intensity mean of
    /// the fitted curve; `"template"`: each point through a published
    /// light-curve template.
    pub from: String,
    /// The K-harmonic fit's error, when the points support one, mag.
    pub fourier_sigma_mag: Option<f64>,
    /// The template's error, when a template applies, mag.
    pub template_sigma_mag: Option<f64>,
    /// The template's per-epoch error, mag.
    pub template_epoch_sigma_mag: Option<f64>,
    /// The template's published source.
    pub template_source: Option<String>,
    /// Intensity mean minus magnitude mean of the star's light curve (a
    /// sinusoid of its amplitude), mag: negative, the intensity mean is
    /// brighter; what a magnitude-mean would be off by.
    pub intensity_minus_magnitude_mag: f64,
}

/// The error of the mean from points through a light-curve template: each
/// point gives the mean with its photometric error and the template's
/// per-epoch error `template_sigma_mag` in quadrature, and the points are
/// averaged with weights: σ = (Σ 1/(σ_i² + σ_t²))^(−1/2), mag. Source: the
/// template's (config/pulsator.toml); the averaging is common practice.
pub fn template_mean_sigma(sigmas: &[f64], template_sigma_mag: f64) -> Result<f64> {
    if sigmas.is_empty() {
        return Err(RungError::invalid("light curve", "no points"));
    }
    let w: f64 = sigmas
        .iter()
        .map(|s| 1.0 / (s * s + template_sigma_mag * template_sigma_mag))
        .sum();
    Ok(1.0 / w.sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The normal matrix summed point by point ([`NormalSums`], as the
    /// scheduler's fill keeps a base's sums and adds one point) is AᵀWA
    /// written out as a double sum over points in order, bit for bit, and
    /// the intensity mean's error from it and from the gradient worked out
    /// apart is [`intensity_mean_sigma`]'s.
    #[test]
    #[allow(clippy::needless_range_loop)]
    fn sums_point_by_point_are_the_normal_matrix_bit_for_bit() {
        let k = 3;
        let n = 2 * k + 1;
        // Irregular phases and errors (a fixed quasi-random sequence).
        let phases: Vec<f64> = (0..13).map(|i| (i as f64 * 0.618_034).fract()).collect();
        let sigmas: Vec<f64> = (0..13).map(|i| 0.01 + 0.003 * (i % 5) as f64).collect();
        let mut sums = NormalSums::new(k);
        for (p, s) in phases.iter().zip(&sigmas) {
            sums.add(*p, *s);
        }
        let mut a = vec![vec![0.0; n]; n];
        for (p, s) in phases.iter().zip(&sigmas) {
            let w = 1.0 / (s * s);
            let mut r = vec![1.0];
            for j in 1..=k {
                let x = 2.0 * PI * j as f64 * p;
                r.push(x.cos());
                r.push(x.sin());
            }
            for i in 0..n {
                for j in 0..n {
                    a[i][j] += w * r[i] * r[j];
                }
            }
        }
        for i in 0..n {
            for j in 0..n {
                assert_eq!(sums.a[i][j].to_bits(), a[i][j].to_bits(), "({i}, {j})");
            }
        }
        let model = sinusoid_model(15.0, 0.8, k);
        let whole = intensity_mean_sigma(&phases, &sigmas, k, &model).unwrap();
        let cov = sums.covariance(&phases, &sigmas).unwrap();
        let parts = intensity_mean_sigma_of(&cov, &model_gradient(&model, k));
        assert_eq!(whole.to_bits(), parts.to_bits());
        // Too few points: the same refusal.
        let few = NormalSums::new(k);
        assert_eq!(
            few.covariance(&phases[..2], &sigmas[..2])
                .unwrap_err()
                .to_string(),
            normal_matrix(&phases[..2], &sigmas[..2], k)
                .unwrap_err()
                .to_string()
        );
    }
}
