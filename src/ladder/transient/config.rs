//! The coefficients of the transient method: `config/transient.toml`
//! (compiled in), each value checked, each source named in the file.

use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::BANDS;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// The default coefficients, `config/transient.toml`, compiled in.
pub const DEFAULT_CONFIG_TOML: &str = config::TRANSIENT.builtin;

/// Which relation standardizes the peak.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Relation {
    /// Tripp form μ = m_B − (M − α x1 + β c) (Betoule et al. 2014 calibration).
    StretchColour,
    /// Decline rate with host extinction from the colour (Phillips et al. 1999).
    DeclineRate,
}

impl Relation {
    /// Parse `stretch_colour`/`stretch-colour` or `decline_rate`/`decline-rate`.
    pub fn parse(s: &str) -> Option<Relation> {
        match s.trim().to_ascii_lowercase().replace('-', "_").as_str() {
            "stretch_colour" | "stretch_color" | "tripp" => Some(Relation::StretchColour),
            "decline_rate" | "phillips" => Some(Relation::DeclineRate),
            _ => None,
        }
    }
    /// The name in files and JSON.
    pub fn as_str(&self) -> &'static str {
        match self {
            Relation::StretchColour => "stretch_colour",
            Relation::DeclineRate => "decline_rate",
        }
    }
    /// In words, for the observer.
    pub fn words(&self) -> &'static str {
        match self {
            Relation::StretchColour => "stretch and colour (Tripp form, Betoule et al. 2014)",
            Relation::DeclineRate => "decline rate with host extinction (Phillips et al. 1999)",
        }
    }
}

/// The stretch–colour (Tripp-form) relation.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct StretchColour {
    /// M_B at x1 = 0, c = 0 on the scale of `m0_h0_km_s_mpc`, mag.
    pub m0_mag: f64,
    /// H0 of the zero point's distance scale, km/s/Mpc.
    pub m0_h0_km_s_mpc: f64,
    /// Uncertainty of the zero point (shared by every distance), mag.
    pub m0_sigma_mag: f64,
    /// Stretch coefficient α, mag per unit x1.
    pub alpha: f64,
    /// Colour coefficient β, mag per mag of c.
    pub beta: f64,
    /// Intrinsic scatter after standardization, mag.
    pub sigma_int_mag: f64,
    /// c = (B−V) at B maximum (dust-corrected for the Milky Way) + this, mag.
    pub colour_offset_mag: f64,
    /// Δm15 at x1 = 0, mag.
    pub dm15_at_x1_zero: f64,
    /// dΔm15/dx1, mag per unit x1.
    pub dm15_per_x1: f64,
    /// Smallest x1 accepted.
    pub x1_min: f64,
    /// Largest x1 accepted.
    pub x1_max: f64,
    /// Smallest c accepted, mag.
    pub c_min: f64,
    /// Largest c accepted, mag.
    pub c_max: f64,
}

/// The decline-rate relation with host extinction from the colour.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct DeclineRate {
    /// M_B at Δm15 = `dm15_ref` on the scale of `m0_h0_km_s_mpc`, mag.
    pub m0_mag: f64,
    /// H0 of the zero point's distance scale, km/s/Mpc.
    pub m0_h0_km_s_mpc: f64,
    /// Uncertainty of the zero point (shared by every distance), mag.
    pub m0_sigma_mag: f64,
    /// Slope of M_B against Δm15, mag per mag.
    pub slope: f64,
    /// Reference decline rate, mag.
    pub dm15_ref: f64,
    /// Scatter about the relation after extinction correction, mag.
    pub sigma_int_mag: f64,
    /// Smallest Δm15 the relation is used for, mag.
    pub dm15_min: f64,
    /// Largest Δm15 the relation is used for, mag.
    pub dm15_max: f64,
}

/// Both relations and the choice between them.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Standardization {
    /// The relation in use.
    pub relation: Relation,
    /// The stretch–colour relation.
    pub stretch_colour: StretchColour,
    /// The decline-rate relation.
    pub decline_rate: DeclineRate,
}

/// The distance scale of the Hubble flow.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Cosmology {
    /// Hubble constant, km/s/Mpc.
    pub h0_km_s_mpc: f64,
    /// Matter density Ωm of a flat ΛCDM universe.
    pub omega_m: f64,
    /// Peculiar-velocity dispersion along the line of sight, km/s.
    pub sigma_v_km_s: f64,
}

/// Dust: foreground and host extinction, and the intrinsic colour.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ExtinctionModel {
    /// σ_A as a fraction of the foreground extinction A.
    pub sigma_fraction: f64,
    /// R_V of Milky-Way dust.
    pub milky_way_r_v: f64,
    /// R_V of host dust.
    pub host_r_v: f64,
    /// Uncertainty of the host R_V.
    pub host_r_v_sigma: f64,
    /// Host E(B−V) assumed for planning, mag.
    pub host_ebv_planning_mag: f64,
    /// Intrinsic B−V at B maximum at Δm15 = 1.1, mag.
    pub intrinsic_colour_mag: f64,
    /// d(B−V)₀/dΔm15.
    pub intrinsic_colour_slope: f64,
    /// Scatter of the intrinsic colour, mag.
    pub intrinsic_colour_sigma_mag: f64,
}

/// What rung does without a spectral template.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct KCorrection {
    /// The omitted correction counts as size_factor × 2.5 log10(1 + z), mag.
    pub size_factor: f64,
    /// The chase is refused above this redshift.
    pub max_redshift: f64,
}

/// One band of the template (see config/transient.toml).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct BandShape {
    /// Band name.
    pub name: String,
    /// Rest-frame days from B maximum to this band's maximum.
    pub max_offset_days: f64,
    /// Δm15 of this band over Δm15(B).
    pub dm15_ratio: f64,
    /// Size of the fast post-maximum drop, mag.
    pub knee_mag: f64,
    /// Slope of the late tail, mag per rest-frame day.
    pub tail_slope_mag_per_day: f64,
    /// (band − V) at maximum without dust, mag (absent for B, whose colour
    /// is the intrinsic colour of [`ExtinctionModel`]).
    #[serde(default)]
    pub colour_to_v_mag: Option<f64>,
}

/// The light-curve template: THE PROJECT'S OWN APPROXIMATION.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct TemplateParams {
    /// Rest-frame rise from explosion to B maximum, days (prior mean).
    pub rise_days: f64,
    /// Prior spread of the rise, days.
    pub rise_sigma_days: f64,
    /// Per-measurement template mismatch, mag.
    pub model_error_mag: f64,
    /// The bands.
    pub band: Vec<BandShape>,
}

/// Planning defaults.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Planning {
    /// Bands of the chase, primary first.
    pub bands: Vec<String>,
    /// Follow-up span after discovery, days.
    pub horizon_days: u32,
    /// Signal-to-noise asked of each band at each epoch.
    pub snr_goal: f64,
    /// Δm15 assumed for planning, mag.
    pub dm15_prior: f64,
    /// Per-measurement photometric floor, mag (quadrature).
    pub phot_floor_mag: f64,
    /// Rest-frame phase assumed at discovery when nothing else places the curve, days.
    pub discovery_phase_days: f64,
    /// Longest exposure in one band at one epoch, s.
    pub max_exptime_s: f64,
    /// Filter change between bands, s.
    pub filter_change_s: f64,
    /// Photometric share of the floor when the goal is below the floor.
    pub phot_share_of_floor: f64,
    /// Distance goal when none is given, percent.
    pub default_goal_pct: f64,
}

/// The practice the cadence follows.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct CadencePractice {
    /// Start of the window around maximum, rest-frame days from B maximum.
    pub near_max_from_days: f64,
    /// End of that window, rest-frame days.
    pub near_max_to_days: f64,
    /// Largest gap inside the window, nights.
    pub max_gap_near_max_nights: u32,
    /// Sparsest gap tried on the decline, nights.
    pub max_every_n: u32,
    /// Planned nights the design must survive losing (0 or 1).
    pub lost_nights_tolerated: u32,
    /// Start of the span where epochs count as sampling the curve, rest-frame days.
    pub sample_from_days: f64,
    /// End of that span, rest-frame days.
    pub sample_to_days: f64,
    /// Epochs needed in that span.
    pub min_epochs: u32,
    /// The first of them no later than this, rest-frame days from B maximum.
    pub first_epoch_by_days: f64,
}

impl CadencePractice {
    /// Whether epochs at `phases_days` (rest-frame days from B maximum) sample
    /// the light curve as practice asks; if not, why.
    pub fn sampled(&self, phases_days: &[f64]) -> std::result::Result<(), String> {
        let inside: Vec<f64> = phases_days
            .iter()
            .copied()
            .filter(|p| (self.sample_from_days..=self.sample_to_days).contains(p))
            .collect();
        let first = inside.iter().copied().fold(f64::INFINITY, f64::min);
        if inside.len() < self.min_epochs as usize || first > self.first_epoch_by_days {
            return Err(format!(
                "the peak is not sampled: practice asks for {} epochs between {} and +{} rest-frame days from maximum, the first by +{} d ({} there, the first at {}), or the peak is only the template's extrapolation",
                self.min_epochs,
                self.sample_from_days,
                self.sample_to_days,
                self.first_epoch_by_days,
                inside.len(),
                if first.is_finite() {
                    format!("{first:+.1} d")
                } else {
                    "none".into()
                }
            ));
        }
        Ok(())
    }
}

/// The classification spectrum.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Classification {
    /// Signal-to-noise per resolution element.
    pub snr_per_resolution_element: f64,
    /// Where the signal-to-noise is asked, Å.
    pub wavelength_angstrom: f64,
    /// Band whose magnitude gives the continuum.
    pub band: String,
    /// Longest exposure accepted, s.
    pub max_exptime_s: f64,
}

/// All coefficients of the transient method.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct TransientConfig {
    /// The standardization relations.
    pub standardization: Standardization,
    /// Flat ΛCDM and peculiar velocities.
    pub cosmology: Cosmology,
    /// Dust and colour.
    pub extinction: ExtinctionModel,
    /// The K-correction rung does not apply.
    pub kcorrection: KCorrection,
    /// Template shape.
    pub template: TemplateParams,
    /// Planning defaults.
    pub planning: Planning,
    /// Cadence practice.
    pub cadence: CadencePractice,
    /// The classification spectrum.
    pub classification: Classification,
}

fn within(v: f64, lo: f64, hi: f64, field: &str, unit: &str) -> Result<()> {
    if v.is_finite() && (lo..=hi).contains(&v) {
        Ok(())
    } else {
        Err(RungError::invalid(
            field,
            format!("{v} must be within {lo}..{hi}{unit}"),
        ))
    }
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

    /// The template's shape of `band`, or an error naming the bands it knows.
    pub fn shape(&self, band: &str) -> Result<&BandShape> {
        self.template
            .band
            .iter()
            .find(|b| b.name == band)
            .ok_or_else(|| RungError::Unknown {
                what: "band of the supernova template".into(),
                name: band.into(),
                hint: format!(
                    "; the template (config/transient.toml, [[template.band]]) has {}",
                    self.template
                        .band
                        .iter()
                        .map(|b| b.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            })
    }

    /// Check a list of chase bands: known to the template, no repeats, B first
    /// (the band of the standardization) and V among them (the colour).
    pub fn check_bands(&self, bands: &[String]) -> Result<()> {
        if bands.first().map(String::as_str) != Some("B") {
            return Err(RungError::invalid(
                "bands",
                format!(
                    "{}: the chase's first band must be B, the band of the standardization",
                    bands.join(",")
                ),
            ));
        }
        if !bands.iter().any(|b| b == "V") {
            return Err(RungError::invalid(
                "bands",
                format!(
                    "{}: the chase needs V with B for the colour that measures the host extinction",
                    bands.join(",")
                ),
            ));
        }
        for (i, b) in bands.iter().enumerate() {
            self.shape(b)?;
            if bands[..i].contains(b) {
                return Err(RungError::invalid("bands", format!("{} is given twice", b)));
            }
        }
        Ok(())
    }

    /// Check every value; a bad one is `RungError::Invalid` naming its dotted key.
    pub fn validated(self) -> Result<Self> {
        let c = self;
        let sc = &c.standardization.stretch_colour;
        within(
            sc.m0_mag,
            -22.0,
            -17.0,
            "standardization.stretch_colour.m0_mag",
            " mag",
        )?;
        within(
            sc.m0_h0_km_s_mpc,
            20.0,
            200.0,
            "standardization.stretch_colour.m0_h0_km_s_mpc",
            " km/s/Mpc",
        )?;
        within(
            sc.m0_sigma_mag,
            0.0,
            1.0,
            "standardization.stretch_colour.m0_sigma_mag",
            " mag",
        )?;
        within(
            sc.alpha,
            0.0,
            1.0,
            "standardization.stretch_colour.alpha",
            "",
        )?;
        within(sc.beta, 0.0, 6.0, "standardization.stretch_colour.beta", "")?;
        within(
            sc.sigma_int_mag,
            0.0,
            1.0,
            "standardization.stretch_colour.sigma_int_mag",
            " mag",
        )?;
        within(
            sc.colour_offset_mag,
            -0.5,
            0.5,
            "standardization.stretch_colour.colour_offset_mag",
            " mag",
        )?;
        within(
            sc.dm15_at_x1_zero,
            0.5,
            2.5,
            "standardization.stretch_colour.dm15_at_x1_zero",
            " mag",
        )?;
        within(
            sc.dm15_per_x1,
            -1.0,
            -0.01,
            "standardization.stretch_colour.dm15_per_x1",
            " mag",
        )?;
        if !(sc.x1_min < sc.x1_max && sc.c_min < sc.c_max) {
            return Err(RungError::invalid(
                "standardization.stretch_colour.x1_min",
                "x1_min must be below x1_max and c_min below c_max",
            ));
        }
        let dr = &c.standardization.decline_rate;
        within(
            dr.m0_mag,
            -22.0,
            -17.0,
            "standardization.decline_rate.m0_mag",
            " mag",
        )?;
        within(
            dr.m0_h0_km_s_mpc,
            20.0,
            200.0,
            "standardization.decline_rate.m0_h0_km_s_mpc",
            " km/s/Mpc",
        )?;
        within(
            dr.m0_sigma_mag,
            0.0,
            1.0,
            "standardization.decline_rate.m0_sigma_mag",
            " mag",
        )?;
        within(dr.slope, 0.0, 3.0, "standardization.decline_rate.slope", "")?;
        within(
            dr.sigma_int_mag,
            0.0,
            1.0,
            "standardization.decline_rate.sigma_int_mag",
            " mag",
        )?;
        if !(dr.dm15_min > 0.0 && dr.dm15_min < dr.dm15_max) {
            return Err(RungError::invalid(
                "standardization.decline_rate.dm15_min",
                "must be positive and below dm15_max",
            ));
        }
        let k = &c.cosmology;
        within(
            k.h0_km_s_mpc,
            20.0,
            200.0,
            "cosmology.h0_km_s_mpc",
            " km/s/Mpc",
        )?;
        within(k.omega_m, 0.0, 1.0, "cosmology.omega_m", "")?;
        within(
            k.sigma_v_km_s,
            0.0,
            3000.0,
            "cosmology.sigma_v_km_s",
            " km/s",
        )?;
        let e = &c.extinction;
        within(e.sigma_fraction, 0.0, 1.0, "extinction.sigma_fraction", "")?;
        within(e.milky_way_r_v, 1.0, 7.0, "extinction.milky_way_r_v", "")?;
        within(e.host_r_v, 1.0, 7.0, "extinction.host_r_v", "")?;
        within(e.host_r_v_sigma, 0.0, 3.0, "extinction.host_r_v_sigma", "")?;
        within(
            e.host_ebv_planning_mag,
            0.0,
            2.0,
            "extinction.host_ebv_planning_mag",
            " mag",
        )?;
        within(
            e.intrinsic_colour_mag,
            -0.5,
            0.5,
            "extinction.intrinsic_colour_mag",
            " mag",
        )?;
        within(
            e.intrinsic_colour_slope,
            -1.0,
            1.0,
            "extinction.intrinsic_colour_slope",
            "",
        )?;
        within(
            e.intrinsic_colour_sigma_mag,
            0.0,
            0.5,
            "extinction.intrinsic_colour_sigma_mag",
            " mag",
        )?;
        within(
            c.kcorrection.size_factor,
            0.0,
            10.0,
            "kcorrection.size_factor",
            "",
        )?;
        within(
            c.kcorrection.max_redshift,
            0.001,
            3.0,
            "kcorrection.max_redshift",
            "",
        )?;
        let t = &c.template;
        within(t.rise_days, 5.0, 40.0, "template.rise_days", " days")?;
        within(
            t.rise_sigma_days,
            0.1,
            10.0,
            "template.rise_sigma_days",
            " days",
        )?;
        within(
            t.model_error_mag,
            0.0,
            0.5,
            "template.model_error_mag",
            " mag",
        )?;
        for (i, b) in t.band.iter().enumerate() {
            let f = |k: &str| format!("template.band.{}.{k}", b.name);
            if !BANDS.contains(&b.name.as_str()) {
                return Err(RungError::invalid(
                    format!("template.band[{i}].name"),
                    format!("'{}' must be one of {}", b.name, BANDS.join(", ")),
                ));
            }
            if t.band[..i].iter().any(|o| o.name == b.name) {
                return Err(RungError::invalid(
                    f("name"),
                    "the band is given twice".to_string(),
                ));
            }
            within(
                b.max_offset_days,
                -10.0,
                10.0,
                &f("max_offset_days"),
                " days",
            )?;
            within(b.dm15_ratio, 0.1, 2.0, &f("dm15_ratio"), "")?;
            within(b.knee_mag, 0.05, 5.0, &f("knee_mag"), " mag")?;
            within(
                b.tail_slope_mag_per_day,
                0.0,
                0.1,
                &f("tail_slope_mag_per_day"),
                " mag/day",
            )?;
            if b.rise_offset_ok(t.rise_days).is_err() {
                return Err(RungError::invalid(
                    f("max_offset_days"),
                    "leaves the band no rise before its maximum".to_string(),
                ));
            }
            match (b.name.as_str(), b.colour_to_v_mag) {
                ("B", Some(_)) => {
                    return Err(RungError::invalid(
                        f("colour_to_v_mag"),
                        "B's colour is the intrinsic colour of [extinction]; leave it out"
                            .to_string(),
                    ));
                }
                ("B", None) => {}
                (_, None) => {
                    return Err(RungError::invalid(
                        f("colour_to_v_mag"),
                        "is required for every band but B".to_string(),
                    ));
                }
                (_, Some(v)) => within(v, -3.0, 3.0, &f("colour_to_v_mag"), " mag")?,
            }
            // The band's decline rate over the prior range must be one the
            // template can follow (it cannot fall faster than knee + 15 tail).
            let fastest = b.dm15_ratio * c.standardization.decline_rate.dm15_max;
            if fastest >= b.knee_mag + 15.0 * b.tail_slope_mag_per_day {
                return Err(RungError::invalid(
                    f("knee_mag"),
                    format!(
                        "{} + 15 × {} cannot fall by the band's fastest decline {fastest:.2} mag in 15 days",
                        b.knee_mag, b.tail_slope_mag_per_day
                    ),
                ));
            }
        }
        for need in ["B", "V"] {
            if !t.band.iter().any(|b| b.name == need) {
                return Err(RungError::invalid(
                    "template.band",
                    format!("the template needs a {need} band"),
                ));
            }
        }
        let p = &c.planning;
        c.check_bands(&p.bands).map_err(|e| match e {
            RungError::Invalid { why, .. } => RungError::invalid("planning.bands", why),
            other => other,
        })?;
        if !(1..=365).contains(&p.horizon_days) {
            return Err(RungError::invalid(
                "planning.horizon_days",
                "must be within 1..365",
            ));
        }
        within(p.snr_goal, 2.0, 10_000.0, "planning.snr_goal", "")?;
        if !(dr.dm15_min..=dr.dm15_max).contains(&p.dm15_prior) {
            return Err(RungError::invalid(
                "planning.dm15_prior",
                "must lie within standardization.decline_rate.dm15_min..dm15_max",
            ));
        }
        within(
            p.phot_floor_mag,
            0.0,
            0.5,
            "planning.phot_floor_mag",
            " mag",
        )?;
        if !(p.discovery_phase_days > -t.rise_days && p.discovery_phase_days < 60.0) {
            return Err(RungError::invalid(
                "planning.discovery_phase_days",
                "must lie after explosion (> -rise_days) and before +60 d",
            ));
        }
        within(
            p.max_exptime_s,
            1.0,
            86_400.0,
            "planning.max_exptime_s",
            " s",
        )?;
        within(
            p.filter_change_s,
            0.0,
            3600.0,
            "planning.filter_change_s",
            " s",
        )?;
        if !(p.phot_share_of_floor > 0.0 && p.phot_share_of_floor <= 1.0) {
            return Err(RungError::invalid(
                "planning.phot_share_of_floor",
                "must be within (0, 1]",
            ));
        }
        if !(p.default_goal_pct > 0.0 && p.default_goal_pct <= 100.0) {
            return Err(RungError::invalid(
                "planning.default_goal_pct",
                "must be within (0, 100]",
            ));
        }
        let k = &c.cadence;
        if !(k.near_max_from_days < k.near_max_to_days
            && k.near_max_from_days.is_finite()
            && k.near_max_to_days.is_finite())
        {
            return Err(RungError::invalid(
                "cadence.near_max_from_days",
                "must be below near_max_to_days",
            ));
        }
        if !(1..=30).contains(&k.max_gap_near_max_nights) {
            return Err(RungError::invalid(
                "cadence.max_gap_near_max_nights",
                "must be within 1..30",
            ));
        }
        if !(k.max_gap_near_max_nights..=30).contains(&k.max_every_n) {
            return Err(RungError::invalid(
                "cadence.max_every_n",
                "must be within max_gap_near_max_nights..30",
            ));
        }
        if !(k.sample_from_days < k.sample_to_days
            && k.first_epoch_by_days >= k.sample_from_days
            && k.first_epoch_by_days <= k.sample_to_days
            && (1..=50).contains(&k.min_epochs))
        {
            return Err(RungError::invalid(
                "cadence.sample_from_days",
                "needs sample_from_days < sample_to_days, first_epoch_by_days between them and min_epochs within 1..50",
            ));
        }
        if k.lost_nights_tolerated > 1 {
            return Err(RungError::invalid(
                "cadence.lost_nights_tolerated",
                "must be 0 or 1",
            ));
        }
        let s = &c.classification;
        within(
            s.snr_per_resolution_element,
            1.0,
            1000.0,
            "classification.snr_per_resolution_element",
            "",
        )?;
        within(
            s.wavelength_angstrom,
            3000.0,
            25_000.0,
            "classification.wavelength_angstrom",
            " Å",
        )?;
        if !BANDS.contains(&s.band.as_str()) {
            return Err(RungError::invalid(
                "classification.band",
                format!("'{}' must be one of {}", s.band, BANDS.join(", ")),
            ));
        }
        within(
            s.max_exptime_s,
            1.0,
            86_400.0,
            "classification.max_exptime_s",
            " s",
        )?;
        Ok(c)
    }
}

impl BandShape {
    fn rise_offset_ok(&self, rise_days: f64) -> std::result::Result<(), ()> {
        if rise_days + self.max_offset_days > 1.0 {
            Ok(())
        } else {
            Err(())
        }
    }
}
