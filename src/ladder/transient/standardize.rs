//! From a fitted light curve to a distance modulus (or, for a calibrator, a
//! peak absolute magnitude): the two standardization relations, the zero
//! point on the adopted distance scale, and the error budget by term
//! (docs/science.md, Thermonuclear supernovae).

use super::config::{Relation, TransientConfig};
use super::cosmology::{FlatLcdm, abs_mag_at_h0, fractional_distance_error, kcorrection_size_mag};
use super::fit::{FitPrecision, variance_of};
use super::template::{CurveParams, Model, N_PARAMS};
use crate::error::{Result, RungError};
use crate::ladder::ErrorTerm;
use serde::Serialize;

/// The standardization zero point: the calibrated peak luminosity on the
/// adopted distance scale. It is an explicit input, shared by every distance
/// standardized the same way; the distance ladder replaces it with the value
/// its calibrators give ([`super::TransientMethod::with_zero_point`]).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ZeroPoint {
    /// The relation's absolute magnitude at its reference (x1 = 0, c = 0 for
    /// the stretch–colour relation; Δm15 = dm15_ref and no host dust for the
    /// decline-rate relation), on the distance scale of `h0_km_s_mpc`, mag.
    pub abs_mag: f64,
    /// Its uncertainty, mag.
    pub sigma_mag: f64,
    /// The H0 whose distance scale `abs_mag` is on, km/s/Mpc.
    pub h0_km_s_mpc: f64,
    /// Where it comes from.
    pub source: String,
}

impl ZeroPoint {
    /// The configured zero point of `relation`, carried from the H0 it was
    /// quoted for to the configured H0 ([`abs_mag_at_h0`]).
    pub fn configured(cfg: &TransientConfig, relation: Relation) -> ZeroPoint {
        let h0 = cfg.cosmology.h0_km_s_mpc;
        let (m, h0_ref, s, src) = match relation {
            Relation::StretchColour => {
                let r = &cfg.standardization.stretch_colour;
                (
                    r.m0_mag,
                    r.m0_h0_km_s_mpc,
                    r.m0_sigma_mag,
                    "Betoule et al. 2014",
                )
            }
            Relation::DeclineRate => {
                let r = &cfg.standardization.decline_rate;
                (
                    r.m0_mag,
                    r.m0_h0_km_s_mpc,
                    r.m0_sigma_mag,
                    "Phillips et al. 1999",
                )
            }
        };
        ZeroPoint {
            abs_mag: abs_mag_at_h0(m, h0_ref, h0),
            sigma_mag: s,
            h0_km_s_mpc: h0,
            source: format!(
                "{src}, {m} mag at H0 = {h0_ref} carried to H0 = {h0} (config/transient.toml)"
            ),
        }
    }

    /// The same zero point on the distance scale of another H0.
    pub fn at_h0(&self, h0_km_s_mpc: f64) -> ZeroPoint {
        ZeroPoint {
            abs_mag: abs_mag_at_h0(self.abs_mag, self.h0_km_s_mpc, h0_km_s_mpc),
            h0_km_s_mpc,
            ..self.clone()
        }
    }
}

/// What the supernova's distance serves.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "role", rename_all = "snake_case")]
pub enum Role {
    /// In the Hubble flow: a distance from the standardized peak, with the
    /// peculiar-velocity term and the shared zero point.
    HubbleFlow {
        /// Redshift.
        z: f64,
    },
    /// Its host has a distance of its own: the supernova calibrates the peak
    /// absolute magnitude.
    Calibrator {
        /// The host's distance modulus, mag.
        host_mu_mag: f64,
        /// Its uncertainty, mag.
        host_mu_err_mag: f64,
    },
    /// No redshift and no host distance: a distance relative to the zero point.
    Unanchored,
}

impl Role {
    /// The role's name in JSON and text.
    pub fn as_str(&self) -> &'static str {
        match self {
            Role::HubbleFlow { .. } => "hubble_flow",
            Role::Calibrator { .. } => "calibrator",
            Role::Unanchored => "unanchored",
        }
    }
}

/// The standardization in use: relation, zero point and cosmology.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Standardizer {
    /// The relation.
    pub relation: Relation,
    /// Its zero point on the configured distance scale.
    pub zero_point: ZeroPoint,
    /// The distance scale of the Hubble flow.
    pub cosmology: FlatLcdm,
}

/// Rest-frame x1 of the stretch–colour relation from a decline rate.
fn x1_of(cfg: &TransientConfig, dm15: f64) -> f64 {
    let s = &cfg.standardization.stretch_colour;
    (dm15 - s.dm15_at_x1_zero) / s.dm15_per_x1
}

impl Standardizer {
    /// The configured standardization with `relation` and `zero_point`
    /// (default: the configured one for the relation).
    pub fn new(
        cfg: &TransientConfig,
        relation: Relation,
        zero_point: Option<ZeroPoint>,
    ) -> Result<Standardizer> {
        let h0 = cfg.cosmology.h0_km_s_mpc;
        Ok(Standardizer {
            relation,
            zero_point: zero_point
                .map(|z| z.at_h0(h0))
                .unwrap_or_else(|| ZeroPoint::configured(cfg, relation)),
            cosmology: FlatLcdm::new(h0, cfg.cosmology.omega_m)?,
        })
    }

    /// Check that the parameters lie where the relation is calibrated: Δm15
    /// within the decline-rate range; x1 and c within the accepted ranges.
    pub fn check(&self, cfg: &TransientConfig, model: &Model, p: &CurveParams) -> Result<()> {
        let dr = &cfg.standardization.decline_rate;
        if !(p.dm15.is_finite() && (dr.dm15_min..=dr.dm15_max).contains(&p.dm15)) {
            return Err(RungError::invalid(
                "dm15",
                format!(
                    "{} is outside the range {}..{} mag the standardization is used for",
                    p.dm15, dr.dm15_min, dr.dm15_max
                ),
            ));
        }
        if self.relation == Relation::StretchColour {
            let s = &cfg.standardization.stretch_colour;
            let x1 = x1_of(cfg, p.dm15);
            let c = self.salt_colour(cfg, model, p);
            if !(s.x1_min..=s.x1_max).contains(&x1) || !(s.c_min..=s.c_max).contains(&c) {
                return Err(RungError::invalid(
                    "dm15",
                    format!(
                        "x1 {x1:.2} or c {c:.2} is outside the stretch-colour relation's range ({}..{}, {}..{})",
                        s.x1_min, s.x1_max, s.c_min, s.c_max
                    ),
                ));
            }
        }
        Ok(())
    }

    fn salt_colour(&self, cfg: &TransientConfig, model: &Model, p: &CurveParams) -> f64 {
        p.colour_mag - model.ebv_mw + cfg.standardization.stretch_colour.colour_offset_mag
    }

    /// A_B / E(B−V) of host dust (the model's B band).
    fn r_b_host(model: &Model) -> f64 {
        model
            .bands
            .iter()
            .find(|b| b.shape.name == "B")
            .map(|b| b.r_host)
            .unwrap_or(4.1)
    }

    fn r_b_mw(model: &Model) -> f64 {
        model
            .bands
            .iter()
            .find(|b| b.shape.name == "B")
            .map(|b| b.r_mw)
            .unwrap_or(4.1)
    }

    /// The standardized absolute magnitude the relation gives for these
    /// light-curve parameters, including the host dust it corrects for, so
    /// that the apparent B peak is m_B = μ + A_B(Milky Way) + this:
    /// - stretch–colour: M − α x1 + β c (Tripp 1998; Betoule et al. 2014);
    /// - decline rate: M + slope (Δm15 − dm15_ref) + R_B E(B−V)_host
    ///   (Phillips et al. 1999).
    pub fn standardized_abs_mag(
        &self,
        cfg: &TransientConfig,
        model: &Model,
        p: &CurveParams,
    ) -> f64 {
        let m = self.zero_point.abs_mag;
        match self.relation {
            Relation::StretchColour => {
                let s = &cfg.standardization.stretch_colour;
                m - s.alpha * x1_of(cfg, p.dm15) + s.beta * self.salt_colour(cfg, model, p)
            }
            Relation::DeclineRate => {
                let d = &cfg.standardization.decline_rate;
                m + d.slope * (p.dm15 - d.dm15_ref) + Self::r_b_host(model) * model.host_ebv(p)
            }
        }
    }

    /// μ = m_B − A_B(Milky Way) − [`Self::standardized_abs_mag`], mag.
    pub fn distance_modulus(&self, cfg: &TransientConfig, model: &Model, p: &CurveParams) -> f64 {
        p.m_max - Self::r_b_mw(model) * model.ebv_mw - self.standardized_abs_mag(cfg, model, p)
    }

    /// The B peak of `p` on the zero point's footing: m_B − A_B(Milky Way)
    /// less the relation's correction ([`Self::standardized_abs_mag`] less
    /// the zero point: decline rate or stretch and colour, host dust). Less
    /// a host's distance modulus it is the peak absolute magnitude M_B the
    /// supernova measures; it equals μ + M_zp for the distance modulus μ of
    /// [`Self::distance_modulus`].
    pub fn standardized_peak(
        &self,
        cfg: &TransientConfig,
        model: &Model,
        p: &CurveParams,
    ) -> StandardizedPeak {
        let mw = Self::r_b_mw(model) * model.ebv_mw;
        let corr = self.standardized_abs_mag(cfg, model, p) - self.zero_point.abs_mag;
        StandardizedPeak {
            peak_b_mag: p.m_max,
            mw_extinction_b_mag: mw,
            correction_mag: corr,
            standardized_peak_mag: p.m_max - mw - corr,
        }
    }

    /// ∂μ/∂(parameters), order of `template::PARAM_NAMES`.
    pub fn gradient(&self, cfg: &TransientConfig, model: &Model) -> [f64; N_PARAMS] {
        match self.relation {
            Relation::StretchColour => {
                let s = &cfg.standardization.stretch_colour;
                [0.0, 1.0, s.alpha / s.dm15_per_x1, -s.beta, 0.0]
            }
            Relation::DeclineRate => {
                let d = &cfg.standardization.decline_rate;
                let rb = Self::r_b_host(model);
                [
                    0.0,
                    1.0,
                    -d.slope + rb * model.intrinsic_colour_slope,
                    -rb,
                    0.0,
                ]
            }
        }
    }

    /// ∂μ/∂E(B−V)_MW: the foreground's extinction of the B peak, less what
    /// the colour correction gives back.
    fn mw_derivative(&self, cfg: &TransientConfig, model: &Model) -> f64 {
        let rb = Self::r_b_mw(model);
        match self.relation {
            Relation::StretchColour => -rb + cfg.standardization.stretch_colour.beta,
            Relation::DeclineRate => -rb + Self::r_b_host(model),
        }
    }

    /// The scatter of the relation, mag.
    pub fn sigma_int_mag(&self, cfg: &TransientConfig) -> f64 {
        match self.relation {
            Relation::StretchColour => cfg.standardization.stretch_colour.sigma_int_mag,
            Relation::DeclineRate => cfg.standardization.decline_rate.sigma_int_mag,
        }
    }

    /// The error budget of the distance (or, for a calibrator, of the peak
    /// absolute magnitude) from the fit's covariance and everything
    /// photometry cannot remove; `z` is the redshift when known (K-correction).
    pub fn budget(
        &self,
        cfg: &TransientConfig,
        model: &Model,
        fit: Option<&FitPrecision>,
        role: Role,
        z: Option<f64>,
    ) -> Result<DistanceBudget> {
        let phot = fit
            .map(|f| variance_of(&f.covariance, &self.gradient(cfg, model)).sqrt())
            .unwrap_or(f64::INFINITY);
        let ext = &cfg.extinction;
        let sigma_mw = (self.mw_derivative(cfg, model) * ext.sigma_fraction * model.ebv_mw).abs();
        let sigma_rv = match self.relation {
            Relation::DeclineRate => {
                // dR_B/dR_V of the law (≈ 1: R_B ≈ R_V + 1) on the host reddening.
                let d = model
                    .bands
                    .iter()
                    .find(|b| b.shape.name == "B")
                    .map(|b| b.dr_host_dr_v)
                    .unwrap_or(1.0);
                Some((d * ext.host_r_v_sigma * ext.host_ebv_planning_mag).abs())
            }
            Relation::StretchColour => None,
        };
        let kcorr = z
            .filter(|z| *z > 0.0)
            .map(|z| cfg.kcorrection.size_factor * kcorrection_size_mag(z))
            .unwrap_or(0.0);
        let (pec, host, zp) = match role {
            Role::HubbleFlow { z } => (
                Some(
                    self.cosmology
                        .peculiar_sigma_mu(z, cfg.cosmology.sigma_v_km_s)?,
                ),
                None,
                Some(self.zero_point.sigma_mag),
            ),
            Role::Calibrator {
                host_mu_err_mag, ..
            } => (None, Some(host_mu_err_mag), None),
            Role::Unanchored => (None, None, Some(self.zero_point.sigma_mag)),
        };
        let sigma_int = self.sigma_int_mag(cfg);
        let floor2 = sigma_int.powi(2)
            + sigma_mw.powi(2)
            + sigma_rv.unwrap_or(0.0).powi(2)
            + kcorr.powi(2)
            + pec.unwrap_or(0.0).powi(2)
            + host.unwrap_or(0.0).powi(2)
            + zp.unwrap_or(0.0).powi(2);
        let total = (phot * phot + floor2).sqrt();
        Ok(DistanceBudget {
            relation: self.relation,
            role,
            sigma_mu_mag: total,
            sigma_mu_phot_mag: phot,
            sigma_int_mag: sigma_int,
            sigma_extinction_mag: sigma_mw,
            sigma_host_rv_mag: sigma_rv,
            sigma_kcorr_mag: kcorr,
            sigma_pec_mag: pec,
            sigma_host_distance_mag: host,
            sigma_zero_point_mag: zp,
            sigma_mu_floor_mag: floor2.sqrt(),
            distance_precision_pct: 100.0 * fractional_distance_error(total),
            floor_pct: 100.0 * fractional_distance_error(floor2.sqrt()),
        })
    }

    /// The host's colour excess and extinction from the fit: E(B−V)_host =
    /// colour − (B−V)₀(Δm15) − E(B−V)_MW with its error (fit covariance and
    /// the intrinsic-colour scatter), and A_V = R_V E(B−V) with the R_V
    /// uncertainty.
    pub fn host_extinction(
        &self,
        cfg: &TransientConfig,
        model: &Model,
        p: &CurveParams,
        fit: Option<&FitPrecision>,
    ) -> HostExtinction {
        let e = &cfg.extinction;
        let ebv = model.host_ebv(p);
        let g = [0.0, 0.0, -model.intrinsic_colour_slope, 1.0, 0.0];
        let sigma_ebv = fit
            .map(|f| (variance_of(&f.covariance, &g) + e.intrinsic_colour_sigma_mag.powi(2)).sqrt())
            .unwrap_or(f64::INFINITY);
        let av = e.host_r_v * ebv;
        let sigma_av = (e.host_r_v * sigma_ebv).hypot(ebv.abs() * e.host_r_v_sigma);
        HostExtinction {
            ebv_mag: ebv,
            sigma_ebv_mag: sigma_ebv,
            r_v: e.host_r_v,
            av_mag: av,
            sigma_av_mag: sigma_av,
        }
    }
}

/// A supernova's B peak standardized as the chase standardizes it
/// ([`Standardizer::standardized_peak`]): m_B,std = m_B − A_B(MW) − ΔM, with
/// ΔM the relation's correction; a calibrator's measured peak absolute
/// magnitude is m_B,std − μ_host.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StandardizedPeak {
    /// The B peak, mag (placed from the peak given in the target's band).
    pub peak_b_mag: f64,
    /// Milky-Way extinction of the B peak, mag (the row's `extinction_mag`
    /// carried to B).
    pub mw_extinction_b_mag: f64,
    /// The standardization's correction ΔM, mag: the standardized absolute
    /// magnitude less the zero point (decline rate or stretch and colour,
    /// and the host dust of the planning colour).
    pub correction_mag: f64,
    /// m_B − A_B(MW) − ΔM, mag.
    pub standardized_peak_mag: f64,
}

/// The host's dust from the colour curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct HostExtinction {
    /// Host colour excess E(B−V), mag (the planning value until measured).
    pub ebv_mag: f64,
    /// Its expected error from the planned epochs, mag.
    pub sigma_ebv_mag: f64,
    /// R_V used.
    pub r_v: f64,
    /// Host A_V, mag.
    pub av_mag: f64,
    /// Its expected error, mag.
    pub sigma_av_mag: f64,
}

/// The error budget of the distance modulus (for a calibrator: of the peak
/// absolute magnitude), by term, mag.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DistanceBudget {
    /// The relation used.
    pub relation: Relation,
    /// Hubble flow, calibrator or unanchored.
    pub role: Role,
    /// Total σ_μ, mag.
    pub sigma_mu_mag: f64,
    /// From the light-curve fit (the relation's gradient through the covariance), mag.
    pub sigma_mu_phot_mag: f64,
    /// Scatter of the relation, mag.
    pub sigma_int_mag: f64,
    /// Foreground (Milky Way) extinction, mag.
    pub sigma_extinction_mag: f64,
    /// Host R_V uncertainty (decline-rate relation), mag.
    pub sigma_host_rv_mag: Option<f64>,
    /// The K-correction rung does not apply, mag.
    pub sigma_kcorr_mag: f64,
    /// Peculiar velocity (Hubble flow), mag.
    pub sigma_pec_mag: Option<f64>,
    /// The host's own distance (calibrator), mag.
    pub sigma_host_distance_mag: Option<f64>,
    /// The standardization zero point (shared), mag.
    pub sigma_zero_point_mag: Option<f64>,
    /// Everything but the fit, mag.
    pub sigma_mu_floor_mag: f64,
    /// σ_d/d, percent (for a calibrator, the same measure of σ(M)).
    pub distance_precision_pct: f64,
    /// σ_d/d of the floor, percent.
    pub floor_pct: f64,
}

impl DistanceBudget {
    /// The budget's terms for the shared `Prediction` face; they add in
    /// quadrature to `sigma_mu_mag`. The zero point is the one shared term.
    pub fn error_terms(&self) -> Vec<ErrorTerm> {
        let mut v = vec![
            ErrorTerm::from_mag("light-curve fit", self.sigma_mu_phot_mag, false),
            ErrorTerm::from_mag("intrinsic scatter", self.sigma_int_mag, false),
            ErrorTerm::from_mag("Milky-Way extinction", self.sigma_extinction_mag, false),
        ];
        if let Some(s) = self.sigma_host_rv_mag {
            v.push(ErrorTerm::from_mag("host R_V", s, false));
        }
        if self.sigma_kcorr_mag > 0.0 {
            v.push(ErrorTerm::from_mag(
                "K-correction (not applied)",
                self.sigma_kcorr_mag,
                false,
            ));
        }
        if let Some(s) = self.sigma_pec_mag {
            v.push(ErrorTerm::from_mag("peculiar velocity", s, false));
        }
        if let Some(s) = self.sigma_host_distance_mag {
            v.push(ErrorTerm::from_mag("host distance", s, false));
        }
        if let Some(s) = self.sigma_zero_point_mag {
            v.push(ErrorTerm::from_mag("standardization zero point", s, true));
        }
        v
    }
}
