//! Interstellar extinction by dust as a function of wavelength: the
//! one-parameter law of Cardelli, Clayton & Mathis (1989, ApJ 345, 245),
//! A(λ)/A(V) = a(x) + b(x)/R_V with x = 1/λ in µm⁻¹, for the optical and
//! near infrared (0.3 ≤ x ≤ 3.3 µm⁻¹, 0.30–3.3 µm).
//!
//! Used by the transient method to turn a supernova's colour excess into the
//! extinction in each of its bands (docs/science.md, Thermonuclear
//! supernovae); any method that needs A_λ/E(B−V) may use it.

use crate::error::{Result, RungError};

/// Optical polynomial coefficients of a(x) in y = x − 1.82, lowest power
/// first (Cardelli, Clayton & Mathis 1989, eq. 3a).
const A_OPT: [f64; 8] = [
    1.0, 0.17699, -0.50447, -0.02427, 0.72085, 0.01979, -0.77530, 0.32999,
];
/// Optical polynomial coefficients of b(x) (Cardelli, Clayton & Mathis 1989, eq. 3b).
const B_OPT: [f64; 8] = [
    0.0, 1.41338, 2.28305, 1.07233, -5.38434, -0.62251, 5.30260, -2.09002,
];

fn poly(c: &[f64], y: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, k| acc * y + k)
}

/// A(λ)/A(V) at wavelength `lambda_angstrom` (Å) for the total-to-selective
/// extinction ratio `r_v` = A(V)/E(B−V): Cardelli, Clayton & Mathis (1989),
/// infrared branch a = 0.574 x^1.61, b = −0.527 x^1.61 for 0.3 ≤ x < 1.1 µm⁻¹
/// and the optical polynomials for 1.1 ≤ x ≤ 3.3 µm⁻¹. The law follows the
/// measured curves to a few per cent in the optical (the paper's own
/// estimate). Refuses wavelengths outside 3030 Å–3.33 µm and R_V outside 1..7.
pub fn ccm89_a_over_av(lambda_angstrom: f64, r_v: f64) -> Result<f64> {
    if !(r_v.is_finite() && (1.0..=7.0).contains(&r_v)) {
        return Err(RungError::invalid(
            "r_v",
            format!("{r_v} is not a total-to-selective extinction ratio within 1..7"),
        ));
    }
    let x = 1.0e4 / lambda_angstrom;
    if !(x.is_finite() && (0.3..=3.3).contains(&x)) {
        return Err(RungError::invalid(
            "wavelength",
            format!(
                "{lambda_angstrom} Å is outside the optical and near-infrared range of the extinction law (3030 Å to 3.3 µm)"
            ),
        ));
    }
    let (a, b) = if x < 1.1 {
        (0.574 * x.powf(1.61), -0.527 * x.powf(1.61))
    } else {
        let y = x - 1.82;
        (poly(&A_OPT, y), poly(&B_OPT, y))
    };
    Ok(a + b / r_v)
}

/// A(λ)/E(B−V) = R_V · A(λ)/A(V) (the extinction in a band per magnitude of
/// colour excess), from [`ccm89_a_over_av`].
pub fn extinction_per_ebv(lambda_angstrom: f64, r_v: f64) -> Result<f64> {
    Ok(r_v * ccm89_a_over_av(lambda_angstrom, r_v)?)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normalised_at_v_and_falls_to_the_red() {
        // x = 1.82 µm⁻¹ (5495 Å) is where the polynomials give a = 1, b = 0.
        assert!((ccm89_a_over_av(1.0e4 / 1.82, 3.1).unwrap() - 1.0).abs() < 1e-12);
        let b = ccm89_a_over_av(4400.0, 3.1).unwrap();
        let i = ccm89_a_over_av(8000.0, 3.1).unwrap();
        assert!(b > 1.0 && i < 1.0);
        assert!(ccm89_a_over_av(2000.0, 3.1).is_err());
        assert!(ccm89_a_over_av(5500.0, 0.5).is_err());
    }
}
