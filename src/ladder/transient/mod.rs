//! Thermonuclear supernovae: the chase from discovery to a standardized-candle
//! distance, as practised (docs/science.md, Thermonuclear supernovae).
//!
//! A fresh transient is a candidate until a spectrum classifies it, so the
//! chase plans a classification spectrum on the first usable night and calls
//! its plan provisional until then. Night by night to a horizon it follows the
//! supernova in several bands (B, V and a red band by default) on the
//! project's own multi-band template; the light-curve fit has five free
//! parameters (time of maximum, peak, decline rate, colour, rise), and its
//! Fisher precision over the proposed epochs, standardized by the decline rate
//! or the stretch–colour relation, with the host extinction from the colour,
//! the K-correction rung cannot apply, and either the peculiar velocity and
//! the shared zero point (Hubble flow) or the host's own distance
//! (calibrator), gives the distance precision. The cadence follows practice:
//! a point before maximum when the discovery allows it, every 2–3 nights
//! around maximum, sparser on the decline, and it must survive a lost night.
//!
//! Modules: [`config`] (coefficients, `config/transient.toml`), [`template`]
//! (the light curves), [`fit`] (Fisher precision), [`standardize`] (relations,
//! zero point, error budget), [`cosmology`] (flat ΛCDM), [`chase`] (nights,
//! classification and cadence).

pub mod chase;
pub mod config;
pub mod cosmology;
pub mod facts;
pub mod fit;
pub mod standardize;
pub mod template;

pub use chase::{
    BandPlan, CadenceDesign, CadenceSearch, CadenceTrial, Calibration, Chase, ChaseNight,
    ClassificationPlan, SPECTRUM_BAND, night_of,
};
pub use config::{DEFAULT_CONFIG_TOML, Relation, TransientConfig};
pub use cosmology::{C_KM_S, FlatLcdm, fractional_distance_error};
pub use facts::{ClassStatus, Facts, Placement};
pub use fit::{FitPrecision, MAG_PER_INV_SNR, Measurement};
pub use standardize::{
    DistanceBudget, HostExtinction, Role, StandardizedPeak, Standardizer, ZeroPoint,
};
pub use template::{CurveParams, Model};

use crate::astro::night::Limits;
use crate::astro::time::Instant;
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{Epoch, ExposureModel, Method, Prediction, Setting, Verdict};
use chase::{RowInput, Search};
use chrono::NaiveDate;

/// Knobs of one chase beyond the configuration, and what a targets file
/// cannot yet say about a supernova.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ChaseOptions {
    /// Nothing is planned before this instant (default: the discovery).
    pub now: Option<Instant>,
    /// SNR per band and epoch (default from config).
    pub snr_goal: Option<f64>,
    /// Decline rate assumed for planning (default from config).
    pub dm15: Option<f64>,
    /// Required σ of the peak magnitude, mag, in addition to the distance goal.
    pub sigma_peak_goal_mag: Option<f64>,
    /// Required σ of Δm15, mag, in addition to the distance goal.
    pub sigma_dm15_goal: Option<f64>,
    /// The standardization relation (default from config).
    pub relation: Option<Relation>,
    /// Bands of the chase (default from config).
    pub bands: Option<Vec<String>>,
    /// Spectroscopic class: `Ia` when classified as a thermonuclear
    /// supernova, another class when classified as something else, none for
    /// a candidate.
    pub classification: Option<String>,
    /// The host's own distance modulus and its error, mag (a calibrator).
    pub host_mu_mag: Option<(f64, f64)>,
    /// A zero point to use instead of the configured one (the distance
    /// ladder's calibration).
    pub zero_point: Option<ZeroPoint>,
}

/// The thermonuclear-supernova method.
#[derive(Debug, Clone)]
pub struct TransientMethod {
    /// Coefficients.
    pub cfg: TransientConfig,
    /// Chase knobs.
    pub options: ChaseOptions,
}

/// Limits a chase uses when none are given: altitude ≥ 30°, Sun below −12°
/// (nautical twilight; a fresh transient is worth the bright edge of the night).
pub fn default_limits() -> Limits {
    Limits {
        min_alt_deg: 30.0,
        sun_alt_deg: -12.0,
    }
}

/// Check the band of a target's magnitudes: one the template knows.
pub fn check_band(cfg: &TransientConfig, band: &str) -> Result<()> {
    cfg.shape(band).map(|_| ())
}

fn goal_sigma_mu(goal_pct: f64) -> f64 {
    goal_pct / 100.0 / fractional_distance_error(1.0)
}

impl TransientMethod {
    /// The method with the built-in configuration merged with the user's
    /// `transient.toml`.
    pub fn new() -> Result<Self> {
        Ok(TransientMethod {
            cfg: TransientConfig::load(None)?,
            options: ChaseOptions::default(),
        })
    }

    /// The method with its configuration from the layers of
    /// [`TransientConfig::load`] (built-in, the user's file, then `extra`).
    pub fn load(extra: Option<&std::path::Path>) -> Result<Self> {
        Ok(Self::with(
            TransientConfig::load(extra)?,
            ChaseOptions::default(),
        ))
    }

    /// The method with a given configuration and options.
    pub fn with(cfg: TransientConfig, options: ChaseOptions) -> Self {
        TransientMethod { cfg, options }
    }

    /// The same method with another standardization zero point (the distance
    /// ladder's calibration replaces the configured one this way).
    pub fn with_zero_point(mut self, zp: ZeroPoint) -> Self {
        self.options.zero_point = Some(zp);
        self
    }

    /// The relation in use.
    pub fn relation(&self) -> Relation {
        self.options
            .relation
            .unwrap_or(self.cfg.standardization.relation)
    }

    /// The standardization in use (relation, zero point, cosmology).
    pub fn standardizer(&self) -> Result<Standardizer> {
        Standardizer::new(&self.cfg, self.relation(), self.options.zero_point.clone())
    }

    fn dm15(&self) -> Result<f64> {
        let d = self.options.dm15.unwrap_or(self.cfg.planning.dm15_prior);
        let s = &self.cfg.standardization.decline_rate;
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

    /// What is known of the target: its bands, class, redshift and role.
    pub fn facts(&self, t: &Target) -> Result<Facts> {
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
        let listed: Vec<String> = t
            .bands
            .split(|c: char| c == ',' || c.is_whitespace())
            .filter(|b| !b.is_empty())
            .map(|b| b.to_ascii_uppercase())
            .collect();
        let bands = match (&self.options.bands, listed.is_empty()) {
            (Some(b), _) => b.clone(),
            (None, false) => listed,
            (None, true) => self.cfg.planning.bands.clone(),
        };
        self.cfg.check_bands(&bands)?;
        crate::bounds::REDSHIFT.check_opt_as("redshift", t.redshift)?;
        let zmax = self.cfg.kcorrection.max_redshift;
        if let Some(z) = t.redshift
            && z > zmax
        {
            return Err(RungError::invalid(
                "redshift",
                format!(
                    "{z} of {} is beyond {zmax}, where the chase's model stops: without K-corrections from a spectral template the observed bands no longer sample the rest-frame light the template and the standardization are made for (docs/science.md, Thermonuclear supernovae)",
                    t.name
                ),
            ));
        }
        let z = t.redshift.filter(|z| *z > 0.0);
        let host = match (self.options.host_mu_mag, t.host_mu_mag, t.host_mu_err_mag) {
            (Some(h), _, _) => Some(h),
            (None, Some(mu), Some(err)) => Some((mu, err)),
            (None, Some(_), None) => {
                return Err(RungError::invalid(
                    "host_mu_err_mag",
                    format!(
                        "{} gives host_mu_mag without host_mu_err_mag: a calibrator needs its host distance's uncertainty",
                        t.name
                    ),
                ));
            }
            (None, None, _) => None,
        };
        let role = match (host, z) {
            (Some((mu, err)), _) => {
                if !((15.0..=45.0).contains(&mu) && (0.0..5.0).contains(&err)) {
                    return Err(RungError::invalid(
                        "host_mu_mag",
                        format!(
                            "{mu} ± {err} is not a host distance modulus (15..45 mag, error 0..5)"
                        ),
                    ));
                }
                Role::Calibrator {
                    host_mu_mag: mu,
                    host_mu_err_mag: err,
                }
            }
            (None, Some(z)) => Role::HubbleFlow { z },
            (None, None) => Role::Unanchored,
        };
        let status = ClassStatus::parse(
            self.options
                .classification
                .as_deref()
                .or(Some(t.classification.as_str())),
        );
        if let ClassStatus::Other(c) = &status {
            return Err(RungError::invalid(
                "classification",
                format!(
                    "{} is classified as {c}: the chase plans standardizable thermonuclear supernovae (class Ia) only",
                    t.name
                ),
            ));
        }
        Ok(Facts {
            bands,
            status,
            role,
            z,
        })
    }

    fn check_target(&self, s: &Setting) -> Result<Facts> {
        let facts = self.facts(s.target)?;
        if let (Some(now), Some(d)) = (self.options.now, s.target.discovered)
            && d.seconds_since(&now) > 0.0
        {
            return Err(RungError::invalid(
                "discovered",
                format!(
                    "{} of {} is after now ({}): a discovery cannot be in the future",
                    d.iso(),
                    s.target.name,
                    now.iso()
                ),
            ));
        }
        Ok(facts)
    }

    /// The template at the target's redshift with its foreground reddening:
    /// the target's `extinction_mag` (in its band) over A_band/E(B−V) of
    /// Milky-Way dust.
    pub fn model(&self, t: &Target, facts: &Facts) -> Result<Model> {
        let mut m = Model::new(&self.cfg, facts.z.unwrap_or(0.0), 0.0)?;
        let k = m.band_index(&t.band)?;
        m.ebv_mw = t.extinction_mag / m.bands[k].r_mw;
        Ok(m)
    }

    /// Place the template for target `t` with an assumed decline rate `dm15`
    /// and the planning colour (intrinsic colour, foreground and a typical
    /// host reddening): the B peak from `peak_mag` (in the target's band),
    /// else from the distance (flat ΛCDM at the redshift, or the host's
    /// distance) through the standardization, else from the discovery
    /// magnitude at the configured discovery phase; the time of maximum from
    /// the discovery magnitude on the rise when it is fainter than the peak,
    /// else from the configured discovery phase. Accuracy: the template's
    /// (a few tenths of a magnitude, so a few days in the time of maximum
    /// when placed from the rise).
    pub fn place(
        &self,
        t: &Target,
        facts: &Facts,
        model: &Model,
        std: &Standardizer,
        dm15: f64,
    ) -> Result<Placement> {
        let cfg = &self.cfg;
        let disc = t.discovered.ok_or_else(|| {
            RungError::invalid(
                "discovered",
                format!("target {} has no discovery time", t.name),
            )
        })?;
        let z = facts.z.unwrap_or(0.0);
        let colour =
            model.intrinsic_colour(dm15) + model.ebv_mw + cfg.extinction.host_ebv_planning_mag;
        let mut p = CurveParams {
            t_max_mjd: disc.mjd_utc(),
            m_max: 0.0,
            dm15,
            colour_mag: colour,
            rise_days: cfg.template.rise_days,
        };
        let kb = model.band_index("B")?;
        let kx = model.band_index(&t.band)?;
        let a_b = model.bands[kb].r_mw * model.ebv_mw;
        let off = model.peak_offset(kx, &p);
        let offset_days = model.bands[kx].shape.max_offset_days;
        let rise_x = p.rise_days + offset_days;
        let (mu, mu_how) = match facts.role {
            Role::HubbleFlow { z } => (
                Some(std.cosmology.distance_modulus(z)?),
                format!(
                    "flat ΛCDM at z = {z} (H0 = {}, Ωm = {})",
                    std.cosmology.h0_km_s_mpc, std.cosmology.omega_m
                ),
            ),
            Role::Calibrator { host_mu_mag, .. } => (
                Some(host_mu_mag),
                format!("the host's distance modulus {host_mu_mag}"),
            ),
            Role::Unanchored => (None, String::new()),
        };
        let hubble_peak_mag = mu.map(|mu| mu + a_b + std.standardized_abs_mag(cfg, model, &p));
        let phase0 = cfg.planning.discovery_phase_days;
        let b = &t.band;
        let (m_b, mut how) = match (t.peak_mag, hubble_peak_mag, t.mag_now) {
            (Some(pk), _, _) => (pk - off, format!("peak {pk:.2} mag in {b} as given")),
            (None, Some(h), _) => (
                h,
                format!(
                    "B peak {h:.2} mag from {mu_how}, the {} zero point and a host E(B−V) of {} assumed",
                    std.relation.as_str(),
                    cfg.extinction.host_ebv_planning_mag
                ),
            ),
            (None, None, Some(m)) => {
                let d = template::band_delta_mag(
                    &model.bands[kx].shape,
                    phase0 - offset_days,
                    model.bands[kx].shape.dm15_ratio * dm15,
                    rise_x,
                )
                .ok_or_else(|| {
                    RungError::invalid("discovery_phase_days", "outside the template")
                })?;
                (
                    m - off - d,
                    format!(
                        "B peak {:.2} mag from the discovery magnitude assuming discovery at {phase0} d from maximum",
                        m - off - d
                    ),
                )
            }
            (None, None, None) => {
                return Err(RungError::invalid(
                    "peak_mag",
                    format!(
                        "target {} needs peak_mag, mag_now, a redshift or a host distance to place its light curve",
                        t.name
                    ),
                ));
            }
        };
        p.m_max = m_b;
        let phase_b = match t.mag_now {
            Some(m) if t.peak_mag.is_some() || hubble_peak_mag.is_some() => {
                let peak_x = m_b + off;
                if m > peak_x + 0.02 {
                    let ph = template::rise_phase_for(m - peak_x, rise_x)
                        .map(|x| x + offset_days)
                        .unwrap_or(phase0);
                    how.push_str(&format!(
                        "; discovered {:.2} mag below its {b} peak, on the rise {:.1} rest-frame days before B maximum",
                        m - peak_x,
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
        p.t_max_mjd = disc.mjd_utc() - phase_b * (1.0 + z);
        Ok(Placement {
            params: p,
            z,
            hubble_peak_mag,
            how,
        })
    }

    /// The given peak of a supernova (`peak_mag`, in its band) standardized
    /// exactly as its chase standardizes it: placed on the template with the
    /// planning decline rate and colour ([`Self::place`]), the Milky-Way
    /// extinction of its row taken off and the relation's correction applied
    /// ([`Standardizer::standardized_peak`]). `None` without a given peak.
    /// Less its host's distance modulus it is the peak absolute magnitude a
    /// calibrator measures (the ladder's calibrators, `rung chase`).
    pub fn standardized_peak(&self, t: &Target) -> Result<Option<StandardizedPeak>> {
        if t.peak_mag.is_none() {
            return Ok(None);
        }
        let facts = self.facts(t)?;
        let model = self.model(t, &facts)?;
        let std = self.standardizer()?;
        let pl = self.place(t, &facts, &model, &std, self.dm15()?)?;
        std.check(&self.cfg, &model, &pl.params)?;
        Ok(Some(std.standardized_peak(&self.cfg, &model, &pl.params)))
    }

    /// The error terms of a supernova already observed, its light curve
    /// fitted with a peak good to `peak_err_mag`: the terms its chase would
    /// carry (intrinsic scatter, Milky-Way extinction, the K-correction not
    /// applied, its peculiar velocity in the Hubble flow or its host's
    /// distance, the shared zero point), the light-curve fit's being the
    /// given error instead ("light-curve fit (given)").
    pub fn observed_terms(
        &self,
        t: &Target,
        peak_err_mag: f64,
    ) -> Result<Vec<crate::ladder::ErrorTerm>> {
        let facts = self.facts(t)?;
        let model = self.model(t, &facts)?;
        let std = self.standardizer()?;
        let b = std.budget(&self.cfg, &model, None, facts.role, facts.z)?;
        Ok(b.error_terms()
            .into_iter()
            .map(|e| {
                if e.name == "light-curve fit" {
                    crate::ladder::ErrorTerm::from_mag(
                        "light-curve fit (given)",
                        peak_err_mag,
                        false,
                    )
                } else {
                    e
                }
            })
            .collect())
    }

    /// Everything that depends only on the target: facts, model, standardizer, placement.
    fn prepare(&self, s: &Setting) -> Result<(Facts, Model, Standardizer, Placement)> {
        let facts = self.check_target(s)?;
        let model = self.model(s.target, &facts)?;
        let std = self.standardizer()?;
        let pl = self.place(s.target, &facts, &model, &std, self.dm15()?)?;
        std.check(&self.cfg, &model, &pl.params)?;
        Ok((facts, model, std, pl))
    }

    /// Plan the chase: nights from `s.from` (not before the discovery night)
    /// to `s.to` and the configured horizon, the classification spectrum on the
    /// first usable night, an epoch per night in every band with exposures
    /// from `em`, and the cadence that follows practice (see
    /// `config/transient.toml`, `[cadence]`) with the fewest telescope hours
    /// that reaches the distance goal `goal_pct` (or, when the goal lies below
    /// the floor, brings the photometric share under `phot_share_of_floor` of
    /// it) and any σ goals in the options, even with a planned night lost.
    pub fn chase(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: Option<f64>,
    ) -> Result<Chase> {
        let (facts, model, std, pl) = self.prepare(s)?;
        let cfg = &self.cfg;
        let target = s.target;
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
        let disc = target.discovered.ok_or_else(|| {
            RungError::invalid("discovered", "a transient needs a discovery time")
        })?;
        let not_before = match self.options.now {
            Some(n) if n.seconds_since(&disc) > 0.0 => n,
            _ => disc,
        };
        let first = night_of(s.site, not_before).max(s.from);
        chase::check_range(first, s.to)?;
        let horizon_end = first + chrono::Duration::days(cfg.planning.horizon_days as i64);
        let last = s.to.min(horizon_end);
        let dates: Vec<NaiveDate> = first.iter_days().take_while(|d| *d <= last).collect();
        let place = target.place();
        let inp = RowInput {
            cfg,
            model: &model,
            facts: &facts,
            pl: &pl,
            snr,
            not_before,
        };
        let rows: Vec<Result<ChaseNight>> = {
            use rayon::prelude::*;
            dates
                .par_iter()
                .map(|d| chase::night_row(s, em, &place, &inp, *d))
                .collect()
        };
        let mut nights = Vec::with_capacity(rows.len());
        for r in rows {
            nights.push(r?);
        }
        let z = facts.z;
        let mut notes = vec![format!("light curve: {}", pl.how)];

        // Classification first.
        let classification = self.plan_classification(&mut nights, &facts);
        let provisional = facts.needs_classification();
        if provisional {
            notes.insert(0, format!("PROVISIONAL: {}", classification.note));
        } else {
            notes.push(classification.note.clone());
        }
        notes.push(format!(
            "template: this project's own approximation in {} (rise {} ± {} d free in the fit, Δm15 {} assumed); magnitudes are good to a few tenths",
            facts.bands.join(", "),
            cfg.template.rise_days,
            cfg.template.rise_sigma_days,
            pl.params.dm15
        ));
        notes.push(format!(
            "standardization: {}; zero point M_B {:.3} ± {} mag on the H0 = {} scale",
            std.relation.words(),
            std.zero_point.abs_mag,
            std.zero_point.sigma_mag,
            std.zero_point.h0_km_s_mpc
        ));
        if let Some(h) = pl.hubble_peak_mag
            && let Some(pk) = target.peak_mag
        {
            let kx = model.band_index(&target.band)?;
            let expect = h + model.peak_offset(kx, &pl.params);
            if (pk - expect).abs() > 1.0 {
                notes.push(format!(
                    "the given peak differs from the {expect:.2} mag its distance predicts by more than 1 mag: extra extinction, a peculiar event, or a wrong redshift"
                ));
            }
        }
        match facts.role {
            Role::Unanchored => notes.push(
                "no redshift and no host distance: the peculiar-velocity term is left out and the distance is relative to the adopted zero point".into(),
            ),
            Role::Calibrator { host_mu_mag, host_mu_err_mag } => notes.push(format!(
                "calibrator: its host's own distance modulus {host_mu_mag} ± {host_mu_err_mag} mag turns the standardized peak into a peak absolute magnitude"
            )),
            Role::HubbleFlow { .. } => {}
        }
        let goal_mu = goal_sigma_mu(goal);
        let floor_budget = std.budget(cfg, &model, None, facts.role, z)?;
        if let Some(z) = z
            && floor_budget.sigma_kcorr_mag > goal_mu
        {
            notes.push(format!(
                "at z = {z} the K-correction rung cannot apply (about {:.2} mag; no spectral template ships with rung) alone exceeds the {goal}% goal: no plan reaches it with this model (docs/science.md)",
                floor_budget.sigma_kcorr_mag
            ));
        }
        self.observability_notes(&nights, s, &pl, &mut notes);

        // The cadence search.
        let floor = floor_budget.sigma_mu_floor_mag;
        let limited = floor >= goal_mu;
        let need_phot = if limited {
            cfg.planning.phot_share_of_floor * floor
        } else {
            (goal_mu * goal_mu - floor * floor).sqrt()
        };
        let req = chase::Requirement {
            need_phot_mag: need_phot,
            sigma_peak_goal_mag: self.options.sigma_peak_goal_mag,
            sigma_dm15_goal: self.options.sigma_dm15_goal,
            robust: cfg.cadence.lost_nights_tolerated > 0,
        };
        let usable: Vec<usize> = (0..nights.len()).filter(|i| nights[*i].usable).collect();
        let info = nights
            .iter()
            .map(|n| {
                if n.usable {
                    fit::information(
                        &model,
                        &pl.params,
                        &chase::night_measurements(cfg, &model, n, snr),
                    )
                } else {
                    [[0.0; template::N_PARAMS]; template::N_PARAMS]
                }
            })
            .collect();
        let search = Search {
            cfg,
            model: &model,
            std: &std,
            params: &pl.params,
            role: facts.role,
            z,
            nights: &nights,
            info,
            prior: fit::prior(cfg.template.rise_sigma_days),
        };
        let spec_idx = nights.iter().position(|n| n.classification);
        let design_of = |near: u32,
                         far: u32|
         -> Result<(CadenceDesign, std::result::Result<(), String>)> {
            let idx = search.select(&usable, near, far, spec_idx);
            let e = search.evaluate(&idx, req.robust)?;
            let epochs: Vec<Epoch> = idx
                .iter()
                .filter_map(|i| chase::night_epoch(&nights[*i], snr))
                .collect();
            let hours = epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0;
            let verdict = if near > cfg.cadence.max_gap_near_max_nights {
                Err(format!(
                    "samples the peak only every {near} nights: practice samples every 2–{} nights around maximum, where the time of maximum, the peak and the colour are measured (config/transient.toml, [cadence])",
                    cfg.cadence.max_gap_near_max_nights
                ))
            } else {
                req.judge(&e)
            };
            Ok((
                CadenceDesign {
                    cadence_days: far,
                    near_max_every: near,
                    dense_around_max: near < far,
                    nights: idx,
                    epochs,
                    fit: e.fit,
                    budget: e.budget,
                    sigma_mu_phot_one_lost_mag: e.lost.map(|l| l.1),
                    worst_lost_night: e.lost.map(|l| l.0),
                    hours_needed: hours,
                    meets_requirement: verdict.is_ok(),
                    samples_peak: e.sampled.is_ok(),
                },
                verdict,
            ))
        };
        let max_n = cfg.cadence.max_every_n;
        let mut best: Option<CadenceDesign> = None;
        let mut fallback: Option<CadenceDesign> = None;
        let (mut tried, mut passing) = (0usize, 0usize);
        for near in 1..=max_n {
            for far in near..=max_n {
                let (d, ok) = design_of(near, far)?;
                tried += 1;
                passing += usize::from(ok.is_ok());
                if near == 1 && far == 1 {
                    fallback = Some(d.clone());
                }
                if ok.is_ok()
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
            near_max_every: 1,
            dense_around_max: false,
            nights: Vec::new(),
            epochs: Vec::new(),
            fit: None,
            budget: None,
            sigma_mu_phot_one_lost_mag: None,
            worst_lost_night: None,
            hours_needed: 0.0,
            meets_requirement: false,
            samples_peak: false,
        });
        // Why a sparser cadence fails.
        let mut sparser: Vec<CadenceTrial> = Vec::new();
        if design.meets_requirement {
            let (g, n) = (design.near_max_every, design.cadence_days);
            let mut tries = vec![(g + 1, n.max(g + 1)), (g, n + 1), (max_n, max_n)];
            tries.retain(|(a, b)| *a <= max_n && *b <= max_n && (*a, *b) != (g, n));
            tries.dedup();
            for (a, b) in tries {
                let (d, ok) = design_of(a, b)?;
                if d.nights == design.nights {
                    continue;
                }
                let reason = match ok {
                    Err(r) => r,
                    Ok(()) => format!(
                        "meets the requirement too, but takes {:.2} h against {:.2} h",
                        d.hours_needed, design.hours_needed
                    ),
                };
                sparser.push(CadenceTrial {
                    near_max_every: a,
                    cadence_days: b,
                    epochs: d.epochs.len(),
                    hours: d.hours_needed,
                    sigma_mu_phot_mag: d.budget.map(|b| b.sigma_mu_phot_mag),
                    text: CadenceTrial::words(a, b, d.epochs.len(), d.hours_needed, &reason),
                    reason,
                });
            }
        }
        let design_why = req
            .judge(&search.evaluate(&design.nights, req.robust)?)
            .err()
            .unwrap_or_default();
        drop(search);
        for &i in &design.nights {
            nights[i].planned = true;
        }
        let floor_pct = floor_budget.floor_pct;
        let precision = design.budget.map(|b| b.distance_precision_pct);
        let goal_met = design.samples_peak && precision.is_some_and(|p| p <= goal);
        let verdict = match (&design.budget, design.meets_requirement) {
            (None, _) => {
                notes.push(if usable.len() < 3 {
                    format!(
                        "only {} usable night(s): too few to measure the time of maximum, the peak, the decline and the colour",
                        usable.len()
                    )
                } else {
                    "the usable nights do not fix the time of maximum, the peak, the decline and the colour together (they must bracket maximum and reach well into the decline)".into()
                });
                Verdict::NotObservable { when: None }
            }
            (Some(_), _) if goal_met => Verdict::Reachable,
            (Some(_), _) if !design.samples_peak => {
                notes.push(format!("no cadence measures the light curve: {design_why}"));
                Verdict::NotObservable {
                    when: Some("the usable nights do not sample the peak".into()),
                }
            }
            (Some(_), true) if limited => {
                notes.push(format!(
                    "the goal {goal}% is below the floor {floor_pct:.1}% set by what photometry cannot remove (intrinsic scatter, extinction, K-correction{}); the cadence is sized so photometry adds at most {:.0}% of the floor",
                    match facts.role {
                        Role::HubbleFlow { .. } => ", peculiar velocity, zero point",
                        Role::Calibrator { .. } => ", host distance",
                        Role::Unanchored => ", zero point",
                    },
                    100.0 * cfg.planning.phot_share_of_floor
                ));
                Verdict::LimitedByFloor { floor_pct }
            }
            (Some(b), _) => {
                let why = &design_why;
                notes.push(format!(
                    "even an epoch on every usable night reaches only {:.1}% (goal {goal}%): {why}; the usable nights are too few, too late or too shallow (a higher --snr may help when they are well placed)",
                    b.distance_precision_pct
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
        if design.meets_requirement {
            notes.push(format!(
                "cadence: {}{}; it still meets the requirement with any one planned night lost",
                if design.near_max_every == 1 {
                    "every usable night around maximum".to_string()
                } else {
                    format!("every {} nights around maximum", design.near_max_every)
                },
                if design.cadence_days > design.near_max_every {
                    format!(", every {} on the decline", design.cadence_days)
                } else {
                    String::new()
                }
            ));
        }
        let first_usable = usable.first().map(|i| &nights[*i]);
        match first_usable.and_then(|n| n.phase_days) {
            Some(ph) if ph < 0.0 => notes.push(format!(
                "a point before maximum: {} at {:.1} rest-frame days",
                first_usable.map(|n| n.night.to_string()).unwrap_or_default(),
                ph
            )),
            Some(_) => notes.push(
                "the first usable night is after the predicted maximum: no point before maximum is possible, and the time of maximum rests on the template".into(),
            ),
            None => {}
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
        let host_extinction = design
            .fit
            .as_ref()
            .map(|f| std.host_extinction(cfg, &model, &pl.params, Some(f)));
        let t_max = Instant::from_jd_utc(pl.params.t_max_mjd + 2_400_000.5)?;
        let peak_abs_mag = std.standardized_abs_mag(cfg, &model, &pl.params);
        Ok(Chase {
            target: target.name.clone(),
            band: target.band.clone(),
            bands: facts.bands.clone(),
            standardizer: std,
            role: facts.role,
            placement: pl,
            t_max,
            snr_goal: snr,
            goal_pct: goal,
            last_night: nights
                .iter()
                .rposition(|n| n.window_start.is_some())
                .map(|i| nights[i].night),
            observable_at_horizon: nights.last().is_some_and(|n| n.window_start.is_some()),
            nights,
            classification,
            provisional,
            design,
            sparser,
            cadence_search: chase::CadenceSearch {
                tried,
                passing,
                max_every_n: max_n,
                max_gap_near_max_nights: cfg.cadence.max_gap_near_max_nights,
                need_phot_mag: need_phot,
                robust: req.robust,
            },
            host_extinction,
            peak_abs_mag,
            goal_met,
            verdict,
            cautions,
            notes,
        })
    }

    /// Pick the classification night (the first usable night whose visit can
    /// also take the spectrum within the window and the exposure limit) and say
    /// what the observer should know.
    fn plan_classification(&self, nights: &mut [ChaseNight], facts: &Facts) -> ClassificationPlan {
        let c = &self.cfg.classification;
        if !facts.needs_classification() {
            return ClassificationPlan {
                status: facts.status.label(),
                needed: false,
                night: None,
                time: None,
                spectrum: None,
                note: format!(
                    "classified {}: no classification spectrum needed",
                    facts.status.label()
                ),
            };
        }
        let fits = |n: &ChaseNight| -> bool {
            let (Some(sp), Some(v), Some(a), Some(b)) =
                (&n.spectrum, n.visit_s, n.window_start, n.window_end)
            else {
                return false;
            };
            n.usable && sp.exptime_s <= c.max_exptime_s && v + sp.visit_s <= b.seconds_since(&a)
        };
        let pick = nights.iter().position(fits);
        let any_spec = nights.iter().any(|n| n.spectrum.is_some());
        for n in nights.iter_mut() {
            n.spectrum = if n.usable { n.spectrum.take() } else { None };
        }
        match pick {
            Some(i) => {
                nights[i].classification = true;
                let n = &nights[i];
                let sp = n.spectrum.clone();
                let note = match &sp {
                    Some(sp) => format!(
                        "an unclassified candidate: a classification spectrum ({} at R {:.0}, {:.0} s for SNR {} per resolution element at {} Å) is planned on {}; the plan holds only if it shows a thermonuclear supernova",
                        sp.spectrograph,
                        sp.resolution,
                        sp.exptime_s,
                        c.snr_per_resolution_element,
                        c.wavelength_angstrom,
                        n.night
                    ),
                    None => String::new(),
                };
                ClassificationPlan {
                    status: facts.status.label(),
                    needed: true,
                    night: Some(n.night),
                    time: n.epoch_time,
                    spectrum: sp,
                    note,
                }
            }
            None => {
                let why = if !any_spec {
                    nights
                        .iter()
                        .find_map(|n| n.spectrum_note.clone())
                        .unwrap_or_else(|| "no usable night to take it".to_string())
                } else {
                    format!(
                        "no usable night takes it within {:.0} s and the window: ask a larger telescope",
                        c.max_exptime_s
                    )
                };
                ClassificationPlan {
                    status: facts.status.label(),
                    needed: true,
                    night: None,
                    time: None,
                    spectrum: None,
                    note: format!(
                        "an unclassified candidate and no classification spectrum can be planned ({why}): the plan holds only once a spectrum from elsewhere shows a thermonuclear supernova"
                    ),
                }
            }
        }
    }

    fn observability_notes(
        &self,
        nights: &[ChaseNight],
        s: &Setting,
        pl: &Placement,
        notes: &mut Vec<String>,
    ) {
        let last_idx = nights.iter().rposition(|n| n.window_start.is_some());
        let observable_at_horizon = nights.last().is_some_and(|n| n.window_start.is_some());
        let n_obs = nights.iter().filter(|n| n.window_start.is_some()).count();
        let n_use = nights.iter().filter(|n| n.usable).count();
        let first = nights.first().map(|n| n.night);
        match last_idx.map(|i| nights[i].night) {
            None => notes.push(format!(
                "not observable on any of the {} nights {} to {}: {}",
                nights.len(),
                first.map(|d| d.to_string()).unwrap_or_default(),
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
        let z1 = 1.0 + pl.z;
        if let Some(fi) = nights.iter().position(|n| n.usable)
            && let Some(te) = nights[fi].epoch_time
            && te.mjd_utc() > pl.params.t_max_mjd + 5.0 * z1
        {
            notes.push(format!(
                "the first usable night is {}, {:.0} days after the predicted maximum: the peak is missed",
                nights[fi].night,
                (te.mjd_utc() - pl.params.t_max_mjd) / z1
            ));
        }
        if let Some(m) = nights.iter().find(|n| n.epoch_note.is_some()) {
            notes.push(format!(
                "{} night(s): {}",
                nights.iter().filter(|n| n.epoch_note.is_some()).count(),
                m.epoch_note.clone().unwrap_or_default()
            ));
        }
        if n_use < n_obs {
            notes.push(format!(
                "{} observable night(s) cannot take an epoch (too faint for the exposure limit, or the visit does not fit)",
                n_obs - n_use
            ));
        }
        // Faded past anything measured on every observable night: most
        // likely a discovery date long past, or typed wrong.
        let faded = |n: &ChaseNight| n.expected_mag.is_some_and(chase::faded_past_any_exposure);
        if n_use == 0
            && let Some(n) = nights.iter().find(|n| faded(n))
            && nights
                .iter()
                .filter(|n| n.window_start.is_some())
                .all(faded)
        {
            notes.push(format!(
                "it has faded past any exposure: B {:.1} mag predicted on {}, {:.0} rest-frame days after the predicted maximum: check the discovery date",
                n.expected_mag.unwrap_or(f64::NAN),
                n.night,
                n.phase_days.unwrap_or(f64::NAN)
            ));
        }
        let t15 = pl.params.t_max_mjd + 15.0 * z1;
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

    /// The epochs of the cheapest cadence that follows practice and reaches
    /// the target's goal (or the configured default goal).
    fn propose(&self, s: &Setting, em: &dyn ExposureModel) -> Result<Vec<Epoch>> {
        Ok(self.chase(s, em, None)?.design.epochs)
    }

    /// Fisher precision of the given epochs (their times and each band's SNR;
    /// an epoch without bands counts as one in the target's band at its SNR;
    /// the classification spectrum adds hours, not precision) on the
    /// template placed for the target, and the distance budget.
    fn predict(
        &self,
        s: &Setting,
        _em: &dyn ExposureModel,
        epochs: &[Epoch],
    ) -> Result<Prediction> {
        self.predict_prepared(s, &self.prepare(s)?, epochs)
    }

    /// [`Method::predict`] of `base` and each extra with the target's
    /// `prepare` worked out once (it depends on the
    /// target alone, and is most of a prediction's work); `predict` for
    /// each when it refuses the target (it words the refusal).
    fn predict_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra: &[Epoch],
    ) -> Vec<Result<Prediction>> {
        let Ok(prep) = self.prepare(s) else {
            return crate::ladder::predict_each_by_one(self, s, em, base, extra);
        };
        self.each_extra_prepared(s, &prep, base, extra)
    }

    fn predict_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        let Ok(prep) = self.prepare(s) else {
            return crate::ladder::predict_then_each_by_one(self, s, em, base, extra_for);
        };
        crate::ladder::then_each(self.predict_prepared(s, &prep, base), extra_for, |extra| {
            self.each_extra_prepared(s, &prep, base, extra)
        })
    }

    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        Ok(self.chase(s, em, Some(goal_pct))?.prediction())
    }
}

/// What [`TransientMethod::prepare`] gives: the facts, the light-curve
/// model, the standardizer and the placement.
type Prepared = (Facts, Model, Standardizer, Placement);

impl TransientMethod {
    /// `predict` of `base` followed by each of `extra`, from `prep`.
    fn each_extra_prepared(
        &self,
        s: &Setting,
        prep: &Prepared,
        base: &[Epoch],
        extra: &[Epoch],
    ) -> Vec<Result<Prediction>> {
        crate::ladder::with_each_extra(base, extra, |_, all| self.predict_prepared(s, prep, all))
    }

    /// [`Method::predict`] after its [`TransientMethod::prepare`].
    fn predict_prepared(
        &self,
        s: &Setting,
        prep: &Prepared,
        epochs: &[Epoch],
    ) -> Result<Prediction> {
        let (facts, model, std, pl) = prep;
        let cfg = &self.cfg;
        let sigma = |snr: f64| {
            fit::measurement_sigma(
                snr.max(1e-6),
                cfg.planning.phot_floor_mag,
                cfg.template.model_error_mag,
            )
        };
        let mut meas = Vec::new();
        for e in epochs {
            let t = e.time.mjd_utc();
            if e.exposures.is_empty() {
                meas.push(Measurement {
                    t_mjd: t,
                    band: model.band_index(&s.target.band)?,
                    sigma_mag: sigma(e.snr),
                });
            }
            for b in &e.exposures {
                if let Ok(k) = model.band_index(&b.band) {
                    meas.push(Measurement {
                        t_mjd: t,
                        band: k,
                        sigma_mag: sigma(b.snr),
                    });
                }
            }
        }
        let f = fit::fisher_precision(model, &pl.params, &meas, cfg.template.rise_sigma_days);
        let budget = f
            .as_ref()
            .map(|f| std.budget(cfg, model, Some(f), facts.role, facts.z))
            .transpose()?;
        let hours = epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0;
        let mut notes = vec![format!("light curve: {}", pl.how)];
        if facts.needs_classification() {
            notes.insert(
                0,
                "PROVISIONAL: an unclassified candidate; the plan holds only if a spectrum shows a thermonuclear supernova".into(),
            );
        }
        let pct = budget
            .map(|b| b.distance_precision_pct)
            .unwrap_or(f64::INFINITY);
        let phases: Vec<f64> = epochs
            .iter()
            .map(|e| (e.time.mjd_utc() - pl.params.t_max_mjd) / (1.0 + pl.z))
            .collect();
        let sampled = cfg.cadence.sampled(&phases);
        let verdict = match (budget, s.target.goal_pct) {
            (Some(_), _) if sampled.is_err() => {
                notes.push(sampled.clone().err().unwrap_or_default());
                Verdict::NotObservable {
                    when: Some("the epochs do not sample the peak".into()),
                }
            }
            (None, _) => {
                notes.push(
                    "the epochs do not fix the time of maximum, the peak, the decline and the colour together"
                        .into(),
                );
                Verdict::NotObservable { when: None }
            }
            (Some(_), None) => Verdict::Reachable,
            (Some(b), Some(g)) if b.distance_precision_pct <= g => Verdict::Reachable,
            (Some(b), Some(g)) if b.floor_pct > g => Verdict::LimitedByFloor {
                floor_pct: b.floor_pct,
            },
            (Some(_), Some(_)) => Verdict::NeedsMoreSeasons { seasons: None },
        };
        if let Some(f) = f {
            notes.push(format!(
                "σ(t_max) {:.2} d, σ(peak) {:.3} mag, σ(Δm15) {:.3} mag, σ(colour) {:.3} mag",
                f.sigma_tmax_d, f.sigma_peak_mag, f.sigma_dm15, f.sigma_colour_mag
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
}
