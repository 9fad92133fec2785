//! Distances in the Hubble flow: the luminosity distance of a flat ΛCDM
//! universe, the peculiar-velocity term, the absolute-magnitude zero point
//! carried to the adopted H0, and the size of the K-correction rung does not
//! apply (docs/science.md, Thermonuclear supernovae).

use crate::error::{Result, RungError};
use serde::{Deserialize, Serialize};
use std::f64::consts::LN_10;

/// Speed of light, km/s (SI definition).
pub const C_KM_S: f64 = 299_792.458;

/// Largest redshift the distance functions accept (the chase refuses much
/// lower ones; see `kcorrection.max_redshift` in config/transient.toml).
pub const MAX_Z: f64 = 3.0;

/// Intervals of the composite Simpson rule for the comoving distance (even).
/// The integrand 1/E(z) is smooth and of order one, so the rule's error,
/// of order z h⁴ max|f⁗| / 180, stays below 1e-10 relative for z ≤ 3.
const SIMPSON_INTERVALS: usize = 512;

/// A flat ΛCDM universe: matter density Ωm, a cosmological constant
/// Ω_Λ = 1 − Ωm, no radiation, no curvature.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FlatLcdm {
    /// Hubble constant, km/s/Mpc.
    pub h0_km_s_mpc: f64,
    /// Matter density today in units of the critical density.
    pub omega_m: f64,
}

fn bad_z(z: f64) -> RungError {
    RungError::invalid(
        "redshift",
        format!("{z} must be positive and at most {MAX_Z} for a luminosity distance"),
    )
}

impl FlatLcdm {
    /// A flat ΛCDM universe; H0 within 20..200 km/s/Mpc and Ωm within 0..1.
    pub fn new(h0_km_s_mpc: f64, omega_m: f64) -> Result<Self> {
        if !(h0_km_s_mpc.is_finite() && (20.0..=200.0).contains(&h0_km_s_mpc)) {
            return Err(RungError::invalid(
                "cosmology.h0_km_s_mpc",
                format!("{h0_km_s_mpc} must be within 20..200 km/s/Mpc"),
            ));
        }
        if !(omega_m.is_finite() && (0.0..=1.0).contains(&omega_m)) {
            return Err(RungError::invalid(
                "cosmology.omega_m",
                format!("{omega_m} must be within 0..1"),
            ));
        }
        Ok(FlatLcdm {
            h0_km_s_mpc,
            omega_m,
        })
    }

    /// E(z) = H(z)/H0 = sqrt(Ωm (1 + z)³ + 1 − Ωm) (Friedmann equation for a
    /// flat universe of matter and a cosmological constant; e.g. Hogg 1999,
    /// astro-ph/9905116, eq. 14).
    pub fn e_of_z(&self, z: f64) -> f64 {
        (self.omega_m * (1.0 + z).powi(3) + 1.0 - self.omega_m).sqrt()
    }

    /// Hubble distance c / H0, Mpc.
    pub fn hubble_distance_mpc(&self) -> f64 {
        C_KM_S / self.h0_km_s_mpc
    }

    /// Line-of-sight comoving distance D_C = (c/H0) ∫₀^z dz′/E(z′), Mpc
    /// (Hogg 1999, eq. 15), by the composite Simpson rule; relative error
    /// below 1e-10 for 0 < z ≤ 3. Refuses other redshifts.
    pub fn comoving_distance_mpc(&self, z: f64) -> Result<f64> {
        if !(z.is_finite() && z > 0.0 && z <= MAX_Z) {
            return Err(bad_z(z));
        }
        let n = SIMPSON_INTERVALS;
        let h = z / n as f64;
        let f = |x: f64| 1.0 / self.e_of_z(x);
        let mut s = f(0.0) + f(z);
        for i in 1..n {
            let w = if i % 2 == 1 { 4.0 } else { 2.0 };
            s += w * f(i as f64 * h);
        }
        Ok(self.hubble_distance_mpc() * s * h / 3.0)
    }

    /// Luminosity distance d_L = (1 + z) D_C, Mpc (flat universe; Hogg 1999,
    /// eqs. 16 and 21).
    pub fn luminosity_distance_mpc(&self, z: f64) -> Result<f64> {
        Ok((1.0 + z) * self.comoving_distance_mpc(z)?)
    }

    /// Distance modulus μ = 5 log10(d_L / 10 pc), mag.
    pub fn distance_modulus(&self, z: f64) -> Result<f64> {
        Ok(5.0 * (self.luminosity_distance_mpc(z)? * 1.0e5).log10())
    }

    /// d ln d_L / dz = 1/(1 + z) + (c/H0) / (E(z) D_C) (from d_L = (1 + z) D_C
    /// and dD_C/dz = (c/H0)/E(z)).
    pub fn dln_dl_dz(&self, z: f64) -> Result<f64> {
        let dc = self.comoving_distance_mpc(z)?;
        Ok(1.0 / (1.0 + z) + self.hubble_distance_mpc() / (self.e_of_z(z) * dc))
    }

    /// Distance-modulus error from a line-of-sight peculiar velocity
    /// dispersion `sigma_v_km_s` at redshift `z`: the velocity shifts the
    /// observed redshift by σ_z = (1 + z) σ_v / c, so σ_μ = (5/ln 10) σ_z
    /// d ln d_L/dz; at low z this is the familiar (5/ln 10) σ_v/(c z)
    /// (common practice). Mag.
    pub fn peculiar_sigma_mu(&self, z: f64, sigma_v_km_s: f64) -> Result<f64> {
        let sigma_z = (1.0 + z) * sigma_v_km_s / C_KM_S;
        Ok(5.0 / LN_10 * sigma_z * self.dln_dl_dz(z)?)
    }
}

/// An absolute-magnitude zero point quoted on the distance scale of
/// `h0_ref_km_s_mpc`, carried to `h0_km_s_mpc`: distances scale as 1/H0, so
/// M(H0) = M(H0_ref) + 5 log10(H0 / H0_ref) (a larger H0 puts the same
/// supernovae nearer, hence fainter). Mag.
pub fn abs_mag_at_h0(m_ref: f64, h0_ref_km_s_mpc: f64, h0_km_s_mpc: f64) -> f64 {
    m_ref + 5.0 * (h0_km_s_mpc / h0_ref_km_s_mpc).log10()
}

/// The size of the K-correction that rung does not apply, mag: the bandpass
/// term 2.5 log10(1 + z), which is the whole K-correction of a source whose
/// f_ν is flat (Hogg et al. 2002, astro-ph/0210394: K = −2.5 log10(1 + z) in
/// every band for such a source; quoted from memory). A supernova's real correction differs from it by its spectral
/// slope across the band; without a spectral template rung counts this size
/// as an uncertainty (docs/science.md, Thermonuclear supernovae).
pub fn kcorrection_size_mag(z: f64) -> f64 {
    2.5 * (1.0 + z.max(0.0)).log10()
}

/// Fractional distance error from a distance-modulus error: σ_d/d = (ln 10/5) σ_μ
/// (from m − M = 5 log10(d/10 pc); first order).
pub fn fractional_distance_error(sigma_mu_mag: f64) -> f64 {
    LN_10 / 5.0 * sigma_mu_mag
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn low_redshift_limit_is_the_hubble_law() {
        // d_L → (c z / H0)(1 + (1 − q0) z / 2), q0 = 3Ωm/2 − 1 (Hogg 1999;
        // the second-order expansion, a fact of the trade).
        let c = FlatLcdm::new(70.0, 0.3).unwrap();
        let z = 0.001;
        let dl = c.luminosity_distance_mpc(z).unwrap();
        let q0 = 1.5 * 0.3 - 1.0;
        let series = C_KM_S * z / 70.0 * (1.0 + (1.0 - q0) * z / 2.0);
        assert!((dl / series - 1.0).abs() < 1e-6, "{dl} vs {series}");
        // An empty de Sitter universe (Ωm = 0): d_L = (c/H0) z (1 + z) exactly.
        let d = FlatLcdm::new(70.0, 0.0).unwrap();
        for z in [0.1, 1.0, 2.5] {
            let exact = C_KM_S / 70.0 * z * (1.0 + z);
            assert!((d.luminosity_distance_mpc(z).unwrap() / exact - 1.0).abs() < 1e-12);
        }
        // Einstein–de Sitter (Ωm = 1): D_C = 2 (c/H0)(1 − 1/sqrt(1 + z)).
        let e = FlatLcdm::new(70.0, 1.0).unwrap();
        for z in [0.1, 1.0, 3.0] {
            let exact = 2.0 * C_KM_S / 70.0 * (1.0 - 1.0 / (1.0f64 + z).sqrt());
            assert!((e.comoving_distance_mpc(z).unwrap() / exact - 1.0).abs() < 1e-10);
        }
    }

    #[test]
    fn peculiar_term_tends_to_the_low_redshift_form() {
        let c = FlatLcdm::new(70.0, 0.3).unwrap();
        let z = 0.002;
        let s = c.peculiar_sigma_mu(z, 300.0).unwrap();
        let low = 5.0 / LN_10 * 300.0 / (C_KM_S * z);
        assert!((s / low - 1.0).abs() < 5e-3, "{s} vs {low}");
    }

    #[test]
    fn zero_point_scales_with_h0_in_the_right_direction() {
        // A larger H0 puts the calibrating galaxies nearer: M is fainter.
        let m = abs_mag_at_h0(-19.26, 65.0, 70.0);
        assert!((m - (-19.26 + 5.0 * (70.0f64 / 65.0).log10())).abs() < 1e-12);
        assert!(m > -19.26);
        assert_eq!(abs_mag_at_h0(-19.05, 70.0, 70.0), -19.05);
    }

    #[test]
    fn bad_input_is_refused() {
        assert!(FlatLcdm::new(10.0, 0.3).is_err());
        assert!(FlatLcdm::new(70.0, 1.5).is_err());
        let c = FlatLcdm::new(70.0, 0.3).unwrap();
        for z in [0.0, -0.1, f64::NAN, 3.5] {
            assert!(c.luminosity_distance_mpc(z).is_err(), "{z}");
        }
    }
}
