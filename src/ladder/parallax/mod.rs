//! Trigonometric parallax: parallax factors, the parallactic ellipse, the best
//! nights for epochs, and the precision a schedule buys once position, proper
//! motion and parallax are fitted together.
//!
//! Models (SCIENCE.md, Parallax):
//! - Parallax factors from the Earth's barycentric position (X, Y, Z) in au,
//!   equatorial (BCRS) axes, from SOFA `epv00` at TT:
//!   Pα = X sin α − Y cos α, Pδ = X cos α sin δ + Y sin α sin δ − Z cos δ, so
//!   that the parallactic displacement is Δα cos δ = ϖ Pα, Δδ = ϖ Pδ
//!   (Green, Spherical Astronomy, ch. on parallax; quoted from memory). This is
//!   the first-order term of SOFA `pmpx`'s parallax correction.
//! - The parallactic ellipse has semi-axes ϖ (parallel to the ecliptic) and
//!   ϖ |sin β|, β the ecliptic latitude (Green, from memory).
//! - Per-epoch error: centroid error FWHM / (2.35 SNR), a floor and a
//!   differential-chromatic-refraction term k tan z, added in quadrature.
//! - Weighted least squares for (x0, y0, μx, μy, ϖ); σ_d/d ≈ σ_ϖ/ϖ, and beyond
//!   ~10 % the inverse parallax is a biased distance (Lutz & Kelker 1973).
//!
//! Planning: [`ParallaxMethod::series`] walks the range night by night
//! ([`Night`] and the target's windows above the airmass limit with the Sun
//! below the setting's limit), keeps the instant nearest the meridian within
//! the hour-angle limit, and marks as candidates the nights whose chosen
//! factor is within `factor_fraction` of its yearly extreme. Seasons are runs
//! of candidate nights; [`ParallaxMethod::plan`] takes `epochs_per_season`
//! of each, [`ParallaxMethod::goal_plan`] searches seasons × epochs × SNR for
//! the fewest telescope hours that reach a goal, and when the range falls
//! short continues its nights year by year to a horizon to say how many
//! seasons would do, or what the floor is ([`Reach`]). Moonlight enters through the
//! exposure model (sky brightness), not as a separate Moon-distance cut.

pub mod astrometry;

use crate::astro::airmass::{altitude_for_airmass_deg, kasten_young};
use crate::astro::frames::{CatalogPlace, Context, Observed};
use crate::astro::night::{Limits, Night, TargetNight};
use crate::astro::time::Instant;
use crate::astro::visibility::Track;
use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{Epoch, ExposureModel, Method, Prediction, Setting, Verdict};
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::Path;

/// The built-in defaults, `config/parallax.toml`.
pub const DEFAULT_CONFIG: &str = config::PARALLAX.builtin;

/// Milliarcseconds per radian.
pub const MAS_PER_RAD: f64 = 180.0 / std::f64::consts::PI * 3_600_000.0;

/// Longest date range the factor series accepts, nights (about 12 years).
pub const MAX_RANGE_NIGHTS: i64 = 4400;

/// When the range falls short of a goal, its candidate nights are continued
/// year by year to this many years from the range start (a long parallax
/// programme; about the longest range a series accepts, [`MAX_RANGE_NIGHTS`])
/// to count the seasons that would reach it, or to give the floor.
pub const HORIZON_YEARS: f64 = 12.0;

/// Nights in the year that is repeated beyond the range.
const YEAR_NIGHTS: usize = 365;

/// Sampling step inside an observing window when looking for the best time, seconds.
pub const WINDOW_STEP_S: f64 = 300.0;

/// Which parallax factor a plan maximises.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum FactorAxis {
    /// |Pα|.
    Ra,
    /// |Pδ|.
    Dec,
    /// sqrt(Pα² + Pδ²).
    Combined,
}

impl FactorAxis {
    /// Parse "ra", "dec" or "combined".
    pub fn parse(s: &str) -> Result<Self> {
        match s.trim().to_ascii_lowercase().as_str() {
            "ra" => Ok(FactorAxis::Ra),
            "dec" => Ok(FactorAxis::Dec),
            "combined" | "both" => Ok(FactorAxis::Combined),
            _ => Err(RungError::parse(
                "parallax factor axis",
                s,
                "use ra, dec or combined",
            )),
        }
    }

    /// The lower-case name.
    pub fn as_str(&self) -> &'static str {
        match self {
            FactorAxis::Ra => "ra",
            FactorAxis::Dec => "dec",
            FactorAxis::Combined => "combined",
        }
    }

    /// The size of the factor pair on this axis (≥ 0, au).
    pub fn value(&self, pf_ra: f64, pf_dec: f64) -> f64 {
        match self {
            FactorAxis::Ra => pf_ra.abs(),
            FactorAxis::Dec => pf_dec.abs(),
            FactorAxis::Combined => pf_ra.hypot(pf_dec),
        }
    }
}

/// Modelling choices of the parallax method (`config/parallax.toml`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ParallaxConfig {
    /// Per-epoch astrometric floor, mas.
    pub floor_mas: f64,
    /// Differential chromatic refraction, mas per unit tan z.
    pub dcr_mas_per_tanz: f64,
    /// Hour-angle limit for epochs, hours.
    pub ha_limit_h: f64,
    /// Airmass limit for epochs.
    pub max_airmass: f64,
    /// A candidate night has |factor| ≥ this fraction of the yearly extreme.
    pub factor_fraction: f64,
    /// Which factor is maximised.
    pub factor_axis: FactorAxis,
    /// Signal-to-noise aimed at per proposed epoch.
    pub snr: f64,
    /// Epochs proposed per season.
    pub epochs_per_season: u32,
    /// Most epochs per season the goal search uses.
    pub max_epochs_per_season: u32,
    /// Candidate nights closer than this (days) are one season.
    pub season_gap_d: f64,
    /// σ_ϖ/ϖ (percent) above which the Lutz–Kelker warning is given.
    pub lutz_kelker_pct: f64,
    /// SNR levels tried by the goal search, ascending.
    pub goal_snr_steps: Vec<f64>,
}

impl ParallaxConfig {
    /// The built-in defaults (`config/parallax.toml`).
    pub fn builtin() -> Result<Self> {
        config::merged(&[config::PARALLAX.builtin_layer()], Self::validated)
    }

    /// The built-in defaults with the user's `parallax.toml` (user config
    /// folder) and then `extra` (a file named on the command line) merged over
    /// them key by key; errors name the file, line and key.
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        config::merged(&config::PARALLAX.layers(extra)?, Self::validated)
    }

    /// Parse and check a complete configuration (every key); errors name the
    /// file, line and key.
    pub fn from_toml(text: &str, file: &Path) -> Result<Self> {
        config::merged(&[Layer::new(text, file)], Self::validated)
    }

    /// Check every value; the error names the key.
    pub fn validated(self) -> Result<Self> {
        let pos = |what: &str, v: f64| -> Result<()> {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(RungError::invalid(
                    what,
                    format!("{v} must be a positive number"),
                ))
            }
        };
        if !(self.floor_mas.is_finite() && self.floor_mas >= 0.0) {
            return Err(RungError::invalid(
                "floor_mas",
                format!("{} must be zero or positive (mas)", self.floor_mas),
            ));
        }
        if !(self.dcr_mas_per_tanz.is_finite() && self.dcr_mas_per_tanz >= 0.0) {
            return Err(RungError::invalid(
                "dcr_mas_per_tanz",
                format!("{} must be zero or positive (mas)", self.dcr_mas_per_tanz),
            ));
        }
        if !(self.ha_limit_h.is_finite() && self.ha_limit_h > 0.0 && self.ha_limit_h <= 12.0) {
            return Err(RungError::invalid(
                "ha_limit_h",
                format!("{} is not within (0, 12] hours", self.ha_limit_h),
            ));
        }
        if !(self.max_airmass.is_finite() && self.max_airmass >= 1.0) {
            return Err(RungError::invalid(
                "max_airmass",
                format!("{} must be at least 1", self.max_airmass),
            ));
        }
        if !(self.factor_fraction.is_finite() && (0.0..=1.0).contains(&self.factor_fraction)) {
            return Err(RungError::invalid(
                "factor_fraction",
                format!("{} is not within 0..1", self.factor_fraction),
            ));
        }
        pos("snr", self.snr)?;
        crate::bounds::SNR.check(self.snr)?;
        pos("season_gap_d", self.season_gap_d)?;
        pos("lutz_kelker_pct", self.lutz_kelker_pct)?;
        if self.epochs_per_season == 0 {
            return Err(RungError::invalid(
                "epochs_per_season",
                "must be at least 1",
            ));
        }
        if self.max_epochs_per_season < self.epochs_per_season {
            return Err(RungError::invalid(
                "max_epochs_per_season",
                format!(
                    "{} is below epochs_per_season = {}",
                    self.max_epochs_per_season, self.epochs_per_season
                ),
            ));
        }
        if self.goal_snr_steps.is_empty() {
            return Err(RungError::invalid(
                "goal_snr_steps",
                "give at least one SNR level",
            ));
        }
        for v in &self.goal_snr_steps {
            pos("goal_snr_steps", *v)?;
            crate::bounds::SNR.check_as("goal_snr_steps", *v)?;
        }
        if self.goal_snr_steps.windows(2).any(|w| w[1] <= w[0]) {
            return Err(RungError::invalid("goal_snr_steps", "levels must ascend"));
        }
        Ok(self)
    }
}

/// The error terms of a parallax distance with σϖ/ϖ = `pct` percent: the
/// fit's own term (σ_d/d ≈ σϖ/ϖ), none when the fit gives no finite precision.
fn parallax_terms(pct: f64) -> Vec<crate::ladder::ErrorTerm> {
    if pct.is_finite() {
        vec![crate::ladder::ErrorTerm::from_pct("parallax", pct, false)]
    } else {
        Vec::new()
    }
}

/// Parallax factors (Pα, Pδ), au, of a direction (ICRS α, δ in radians) seen
/// from a barycentric position `earth_bary_au` (au, BCRS axes):
/// Pα = X sin α − Y cos α, Pδ = X cos α sin δ + Y sin α sin δ − Z cos δ
/// (Green, Spherical Astronomy; from memory). The displacement of a star of
/// parallax ϖ is Δα cos δ = ϖ Pα, Δδ = ϖ Pδ, to first order in ϖ (the
/// second-order term is below ϖ²·|E|², 6 µas for ϖ = 1″; checked against ERFA
/// `pmpx` in `tests/parallax_factors.rs`).
pub fn parallax_factors(earth_bary_au: [f64; 3], ra_rad: f64, dec_rad: f64) -> (f64, f64) {
    let [x, y, z] = earth_bary_au;
    let (sa, ca) = ra_rad.sin_cos();
    let (sd, cd) = dec_rad.sin_cos();
    (x * sa - y * ca, x * ca * sd + y * sa * sd - z * cd)
}

/// Parallax factors (au) of a direction at an instant, with the Earth's
/// barycentric position from SOFA `epv00` at TT (accuracy of epv00: a few km,
/// i.e. ~1e-8 in the factors).
pub fn parallax_factors_at(t: Instant, ra_rad: f64, dec_rad: f64) -> Result<(f64, f64)> {
    let (a, b) = t.tt();
    let (_, eb) = sofars::eph::epv00(a, b).ok_or(RungError::Sofa {
        routine: "epv00",
        status: 1,
    })?;
    Ok(parallax_factors(eb[0], ra_rad, dec_rad))
}

/// The Earth's barycentric position (au, SOFA `epv00`) once a day for 366
/// days from `start`: the yearly sweep of the parallax factors, the same for
/// every target of a range, so computed once per start and shared.
fn earth_year(start: Instant) -> Result<std::sync::Arc<Vec<[f64; 3]>>> {
    use std::sync::{Arc, Mutex, OnceLock};
    type Memo = Mutex<Vec<((u64, u64), Arc<Vec<[f64; 3]>>)>>;
    static MEMO: OnceLock<Memo> = OnceLock::new();
    let key = (start.utc1.to_bits(), start.utc2.to_bits());
    let memo = MEMO.get_or_init(|| Mutex::new(Vec::new()));
    if let Ok(m) = memo.lock()
        && let Some((_, v)) = m.iter().find(|(k, _)| *k == key)
    {
        return Ok(v.clone());
    }
    let v = Arc::new(
        (0..366)
            .map(|d| {
                let (a, b) = start.add_seconds(d as f64 * 86_400.0).tt();
                sofars::eph::epv00(a, b)
                    .map(|(_, eb)| eb[0])
                    .ok_or(RungError::Sofa {
                        routine: "epv00",
                        status: 1,
                    })
            })
            .collect::<Result<Vec<_>>>()?,
    );
    if let Ok(mut m) = memo.lock() {
        if m.len() >= 16 {
            m.remove(0);
        }
        m.push((key, v.clone()));
    }
    Ok(v)
}

/// Cached exposure per (night index, SNR step): (exptime_s, n_exp, visit_s) or the model's refusal.
type ExposureCache = HashMap<(usize, usize), std::result::Result<(f64, u32, f64), String>>;

/// The parallactic ellipse of a star.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Ellipse {
    /// Semi-major axis, mas (= ϖ, parallel to the ecliptic).
    pub semi_major_mas: f64,
    /// Semi-minor axis, mas (= ϖ |sin β|).
    pub semi_minor_mas: f64,
    /// Position angle of the major axis, degrees east of north, 0–180.
    pub pa_major_deg: f64,
    /// Ecliptic latitude β (IAU 2006 ecliptic of J2000.0), degrees.
    pub ecliptic_lat_deg: f64,
    /// Ecliptic longitude λ, degrees.
    pub ecliptic_lon_deg: f64,
}

/// The parallactic ellipse of a star at ICRS α, δ (radians) with parallax
/// `parallax_mas`: semi-axes ϖ and ϖ|sin β| (Green, Spherical Astronomy; from
/// memory), the major axis along the direction of increasing ecliptic longitude.
/// Ecliptic coordinates from SOFA `eqec06` at J2000.0. Exact for a circular
/// heliocentric orbit of 1 au; the real path differs by the orbit's
/// eccentricity (±1.7 %) and the Sun's barycentric wobble (~0.01 au).
pub fn parallactic_ellipse(ra_rad: f64, dec_rad: f64, parallax_mas: f64) -> Ellipse {
    let (lon, lat) = sofars::coords::eqec06(2451545.0, 0.0, ra_rad, dec_rad);
    // Ecliptic north pole in ICRS, and its direction in the star's tangent plane.
    let (pa, pd) = sofars::coords::eceq06(2451545.0, 0.0, 0.0, std::f64::consts::FRAC_PI_2);
    let k = sofars::vm::s2c(pa, pd);
    let (sa, ca) = ra_rad.sin_cos();
    let (sd, cd) = dec_rad.sin_cos();
    let east = [-sa, ca, 0.0];
    let north = [-sd * ca, -sd * sa, cd];
    let ke = k[0] * east[0] + k[1] * east[1] + k[2] * east[2];
    let kn = k[0] * north[0] + k[1] * north[1] + k[2] * north[2];
    let pa_pole = ke.atan2(kn).to_degrees();
    Ellipse {
        semi_major_mas: parallax_mas,
        semi_minor_mas: parallax_mas * lat.sin().abs(),
        pa_major_deg: (pa_pole + 90.0).rem_euclid(180.0),
        ecliptic_lat_deg: lat.to_degrees(),
        ecliptic_lon_deg: lon.to_degrees().rem_euclid(360.0),
    }
}

fn ser_date<S: serde::Serializer>(d: &NaiveDate, s: S) -> std::result::Result<S::Ok, S::Error> {
    s.serialize_str(&d.to_string())
}

fn ser_opt_date<S: serde::Serializer>(
    d: &Option<NaiveDate>,
    s: S,
) -> std::result::Result<S::Ok, S::Error> {
    match d {
        Some(d) => s.serialize_str(&d.to_string()),
        None => s.serialize_none(),
    }
}

/// One night of the factor series.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NightFactor {
    /// Local date whose evening starts the night.
    #[serde(serialize_with = "ser_date")]
    pub night: NaiveDate,
    /// Pα at `best_time`, or at local midnight when not observable, au.
    pub pf_ra: f64,
    /// Pδ, au.
    pub pf_dec: f64,
    /// The chosen axis' |factor|, au.
    pub factor: f64,
    /// Observable within the hour-angle and airmass limits in dark time.
    pub observable: bool,
    /// Observable and |factor| ≥ fraction × yearly extreme.
    pub candidate: bool,
    /// The observable instant nearest the meridian.
    pub best_time: Option<Instant>,
    /// Hour angle at `best_time`, hours.
    pub hour_angle_h: Option<f64>,
    /// Airmass at `best_time`.
    pub airmass: Option<f64>,
    /// Minutes of the night inside all the limits.
    pub usable_min: f64,
}

/// The parallax factor through a date range.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Series {
    /// One entry per night.
    pub nights: Vec<NightFactor>,
    /// Largest |factor| of the chosen axis over a year, au.
    pub yearly_extreme: f64,
    /// fraction × yearly_extreme, au.
    pub threshold: f64,
    /// The axis.
    pub axis: FactorAxis,
}

impl Series {
    /// Indices of the candidate nights, grouped into seasons (gaps longer than `gap_d` split).
    pub fn seasons(&self, gap_d: f64) -> Vec<Vec<usize>> {
        let mut out: Vec<Vec<usize>> = Vec::new();
        let mut last: Option<NaiveDate> = None;
        for (i, n) in self.nights.iter().enumerate().filter(|(_, n)| n.candidate) {
            let new = match last {
                None => true,
                Some(l) => (n.night - l).num_days() as f64 > gap_d,
            };
            if new {
                out.push(Vec::new());
            }
            if let Some(s) = out.last_mut() {
                s.push(i);
            }
            last = Some(n.night);
        }
        out
    }
}

/// A solved epoch set: the covariance of (x0, y0, μx, μy, ϖ).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Solution {
    /// σ of the parallax, mas.
    pub sigma_parallax_mas: f64,
    /// σ of μα* (μα cos δ), mas/yr.
    pub sigma_pm_ra_masyr: f64,
    /// σ of μδ, mas/yr.
    pub sigma_pm_dec_masyr: f64,
    /// The larger of the two proper-motion σ, mas/yr.
    pub sigma_pm_masyr: f64,
    /// σ of the position at the reference epoch (RA·cos δ, Dec), mas.
    pub sigma_pos_mas: [f64; 2],
    /// Correlation of ϖ with μα*.
    pub corr_parallax_pm_ra: f64,
    /// Correlation of ϖ with μδ.
    pub corr_parallax_pm_dec: f64,
    /// The larger in absolute value of the two correlations.
    pub corr_parallax_pm: f64,
    /// Reference epoch (mean of the epochs), Julian year TT.
    pub ref_epoch_yr: f64,
    /// Last minus first epoch, years.
    pub baseline_yr: f64,
    /// Number of epochs.
    pub n_epochs: usize,
    /// Covariance matrix of (x0, y0, μx, μy, ϖ), mas and mas/yr.
    pub covariance: [[f64; 5]; 5],
}

/// One epoch as the least squares sees it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EpochObs {
    /// Julian epoch, TT, years.
    pub t_yr: f64,
    /// Pα, au.
    pub pf_ra: f64,
    /// Pδ, au.
    pub pf_dec: f64,
    /// Error of each coordinate, mas.
    pub sigma_mas: f64,
}

/// Per-epoch error of each coordinate, mas: the centroid error
/// FWHM / (2.35 SNR) (a Gaussian's σ = FWHM/2.355 divided by the SNR; common
/// practice), the floor and the DCR term k·tan z added in quadrature, with
/// tan z = sqrt(X² − 1) from the plane-parallel airmass relation X = sec z.
/// Inputs: seeing FWHM in arcsec, the epoch's SNR, its airmass X ≥ 1. The
/// same error is applied to both coordinates (a conservative simplification:
/// DCR acts along the vertical, whose direction on the sky turns with the
/// parallactic angle). The centroid term is the photon-limited estimate of
/// SCIENCE.md (Parallax); the floor and k are modelling choices in
/// `config/parallax.toml`.
pub fn epoch_sigma_mas(
    fwhm_arcsec: f64,
    snr: f64,
    airmass: f64,
    cfg: &ParallaxConfig,
) -> Result<f64> {
    if !(fwhm_arcsec.is_finite() && fwhm_arcsec > 0.0) {
        return Err(RungError::invalid(
            "seeing FWHM",
            format!("{fwhm_arcsec} arcsec must be positive"),
        ));
    }
    if !(snr.is_finite() && snr > 0.0) {
        return Err(RungError::invalid(
            "epoch SNR",
            format!("{snr} must be positive"),
        ));
    }
    if !(airmass.is_finite() && airmass >= 1.0) {
        return Err(RungError::invalid(
            "epoch airmass",
            format!("{airmass} must be at least 1"),
        ));
    }
    let centroid = 1000.0 * fwhm_arcsec / (2.35 * snr);
    let tanz = (airmass * airmass - 1.0).max(0.0).sqrt();
    let dcr = cfg.dcr_mas_per_tanz * tanz;
    Ok((centroid * centroid + cfg.floor_mas * cfg.floor_mas + dcr * dcr).sqrt())
}

/// Weighted least squares for (x0, y0, μx, μy, ϖ) from epochs with parallax
/// factors, model x = x0 + μx (t − t̄) + ϖ Pα, y = y0 + μy (t − t̄) + ϖ Pδ, each
/// coordinate with error σ_i. Returns the covariance (inverse normal matrix,
/// by Cholesky) and the derived σ and correlations; independent of the
/// measured values. Checked against numpy in `tests/parallax_lsq.rs`.
pub fn solve(obs: &[EpochObs]) -> Result<Solution> {
    if obs.is_empty() {
        return Err(RungError::invalid(
            "epoch list",
            "it is empty: give at least three epochs (five unknowns, two coordinates per epoch)",
        ));
    }
    if obs.len() < 3 {
        return Err(RungError::invalid(
            "epoch list",
            format!(
                "{} epoch(s) cannot determine position, proper motion and parallax: give at least three",
                obs.len()
            ),
        ));
    }
    for (i, o) in obs.iter().enumerate() {
        if !(o.sigma_mas.is_finite() && o.sigma_mas > 0.0 && o.t_yr.is_finite()) {
            return Err(RungError::invalid(
                format!("epoch {}", i + 1),
                format!("error {} mas must be positive and finite", o.sigma_mas),
            ));
        }
    }
    let tbar = obs.iter().map(|o| o.t_yr).sum::<f64>() / obs.len() as f64;
    let mut n = [[0.0f64; 5]; 5];
    for o in obs {
        let w = 1.0 / (o.sigma_mas * o.sigma_mas);
        let dt = o.t_yr - tbar;
        for row in [[1.0, 0.0, dt, 0.0, o.pf_ra], [0.0, 1.0, 0.0, dt, o.pf_dec]] {
            for i in 0..5 {
                for j in 0..5 {
                    n[i][j] += w * row[i] * row[j];
                }
            }
        }
    }
    let c = crate::linalg::spd_inverse_n(&n).map_err(|_| {
        RungError::invalid(
            "epoch list",
            "the epochs cannot separate position, proper motion and parallax (singular normal matrix): spread them over different nights and seasons",
        )
    })?;
    let sd = |i: usize| c[i][i].sqrt();
    let corr = |i: usize, j: usize| c[i][j] / (sd(i) * sd(j));
    let (cra, cdec) = (corr(4, 2), corr(4, 3));
    let tmin = obs.iter().map(|o| o.t_yr).fold(f64::INFINITY, f64::min);
    let tmax = obs.iter().map(|o| o.t_yr).fold(f64::NEG_INFINITY, f64::max);
    Ok(Solution {
        sigma_parallax_mas: sd(4),
        sigma_pm_ra_masyr: sd(2),
        sigma_pm_dec_masyr: sd(3),
        sigma_pm_masyr: sd(2).max(sd(3)),
        sigma_pos_mas: [sd(0), sd(1)],
        corr_parallax_pm_ra: cra,
        corr_parallax_pm_dec: cdec,
        corr_parallax_pm: if cra.abs() >= cdec.abs() { cra } else { cdec },
        ref_epoch_yr: tbar,
        baseline_yr: tmax - tmin,
        n_epochs: obs.len(),
        covariance: c,
    })
}

/// An epoch of a parallax plan, with what the fit needs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlannedEpoch {
    /// The night, when the epoch came from the factor series.
    #[serde(serialize_with = "ser_opt_date")]
    pub night: Option<NaiveDate>,
    /// Season number (1-based) within the plan, 0 for a user's epoch.
    pub season: usize,
    /// Time, exposure, SNR, airmass, visit length.
    pub epoch: Epoch,
    /// Pα, au.
    pub pf_ra: f64,
    /// Pδ, au.
    pub pf_dec: f64,
    /// Hour angle, hours.
    pub hour_angle_h: f64,
    /// Error of each coordinate, mas.
    pub sigma_mas: f64,
}

/// Everything a parallax plan says.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ParallaxPlan {
    /// Expected parallax, mas.
    pub parallax_mas: f64,
    /// The parallactic ellipse.
    pub ellipse: Ellipse,
    /// The factor through the range.
    pub series: Series,
    /// Number of seasons with candidate nights in the range.
    pub seasons_available: usize,
    /// The epochs of the plan.
    pub epochs: Vec<PlannedEpoch>,
    /// The fit, when the epochs allow one.
    pub solution: Option<Solution>,
    /// What the epochs buy, in the shared form.
    pub prediction: Prediction,
    /// In goal mode when the range falls short: how far its nights, continued
    /// to the horizon, go toward the goal.
    pub reach: Option<Reach>,
}

/// How far a range's candidate nights, continued year by year to
/// [`HORIZON_YEARS`] from its start, go toward a distance goal
/// (see `ParallaxMethod::goal_plan`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Reach {
    /// SNR per epoch assumed: the highest level of `goal_snr_steps`.
    pub snr: f64,
    /// Seasons of candidate nights inside the range.
    pub range_seasons: usize,
    /// Best σ_ϖ/ϖ of the range's seasons, percent; `None` when they cannot be fitted.
    pub range_best_pct: Option<f64>,
    /// Parallax–proper-motion correlation of that fit.
    pub range_corr_parallax_pm: Option<f64>,
    /// Length of the horizon, years from the range start.
    pub horizon_yr: f64,
    /// Seasons of candidate nights within the horizon.
    pub horizon_seasons: usize,
    /// Best σ_ϖ/ϖ over the whole horizon, percent: the floor the verdict
    /// compares with the goal; `None` when even these nights cannot separate
    /// position, proper motion and parallax.
    pub floor_pct: Option<f64>,
    /// Fewest seasons, counted from the range start, that reach the goal
    /// within the horizon.
    pub seasons_needed: Option<usize>,
    /// Last night of the season that reaches the goal.
    #[serde(serialize_with = "ser_opt_date", rename = "reached_by_night")]
    pub reached_by: Option<NaiveDate>,
    /// The repeated year is a full year of real nights (false only for a
    /// range shorter than a year near the end of rung's span).
    pub full_year: bool,
}

/// The parallax method.
#[derive(Debug, Clone, PartialEq)]
pub struct ParallaxMethod {
    /// Its modelling choices.
    pub cfg: ParallaxConfig,
}

/// The expected parallax of a target, mas; refused when missing, zero or negative.
pub fn expected_parallax_mas(t: &Target) -> Result<f64> {
    match t.parallax_mas {
        None => Err(RungError::invalid(
            format!("target '{}'", t.name),
            "has no expected parallax_mas: give one (mas, positive)",
        )),
        Some(p) if !p.is_finite() || p <= 0.0 => Err(RungError::invalid(
            format!("expected parallax of '{}'", t.name),
            format!("{p} mas is not positive: give the expected parallax_mas as a positive number"),
        )),
        Some(p) => Ok(p),
    }
}

fn target_mag(t: &Target) -> Result<f64> {
    t.mag.filter(|m| m.is_finite()).ok_or_else(|| {
        RungError::invalid(
            format!("target '{}'", t.name),
            "has no mag: the exposure model needs the magnitude in its band",
        )
    })
}

fn fmt_limits(cfg: &ParallaxConfig, lim: &Limits) -> String {
    format!(
        "within ±{:.1} h of the meridian below airmass {:.2} (altitude ≥ {:.0}°) with the Sun below {:.0}°",
        cfg.ha_limit_h, cfg.max_airmass, lim.min_alt_deg, lim.sun_alt_deg
    )
}

/// Pick `k` nights of a season: the season's candidate nights are cut into
/// `k` consecutive chunks of equal length and each chunk gives its best night
/// (largest factor, less 10 % of the yearly extreme per hour-limit of hour
/// angle, so that nights nearer the meridian win ties). All nights when the
/// season is shorter than `k`.
fn spread(series: &Series, season: &[usize], k: usize, ha_limit_h: f64) -> Vec<usize> {
    let m = season.len();
    if k >= m {
        return season.to_vec();
    }
    let score = |i: usize| {
        let n = &series.nights[i];
        n.factor
            - 0.1 * series.yearly_extreme * n.hour_angle_h.unwrap_or(ha_limit_h).abs() / ha_limit_h
    };
    (0..k)
        .filter_map(|c| {
            let a = c * m / k;
            let b = ((c + 1) * m / k).max(a + 1);
            season[a..b.min(m)]
                .iter()
                .copied()
                .max_by(|x, y| score(*x).total_cmp(&score(*y)))
        })
        .collect()
}

impl ParallaxMethod {
    /// The method with its built-in defaults (`config/parallax.toml`).
    pub fn builtin() -> Result<Self> {
        Ok(ParallaxMethod {
            cfg: ParallaxConfig::builtin()?,
        })
    }

    /// The method with its configuration from the layers of
    /// [`ParallaxConfig::load`] (built-in, the user's file, then `extra`).
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        Ok(ParallaxMethod {
            cfg: ParallaxConfig::load(extra)?,
        })
    }

    /// The method with a checked configuration.
    pub fn new(cfg: ParallaxConfig) -> Result<Self> {
        Ok(ParallaxMethod {
            cfg: cfg.validated()?,
        })
    }

    /// The setting's limits tightened by the airmass limit.
    pub fn effective_limits(&self, s: &Setting) -> Limits {
        let alt = altitude_for_airmass_deg(self.cfg.max_airmass).unwrap_or(0.0);
        Limits {
            min_alt_deg: s.limits.min_alt_deg.max(alt),
            sun_alt_deg: s.limits.sun_alt_deg,
        }
    }

    /// The parallax factor through the setting's range, night by night, with
    /// the observable instant nearest the meridian (windows from
    /// [`Night::target`], sampled every [`WINDOW_STEP_S`] plus the transit),
    /// and the yearly extreme of the chosen axis (daily samples over 366 days
    /// from the range start). Nights are computed in parallel.
    pub fn series(&self, s: &Setting) -> Result<Series> {
        let n = (s.to - s.from).num_days();
        if n < 0 {
            return Err(RungError::invalid(
                "date range",
                format!("--to {} is before --from {}", s.to, s.from),
            ));
        }
        if n >= MAX_RANGE_NIGHTS {
            return Err(RungError::invalid(
                "date range",
                format!(
                    "{} nights is more than the {MAX_RANGE_NIGHTS} a parallax series covers",
                    n + 1
                ),
            ));
        }
        let place = s.target.place();
        let lim = self.effective_limits(s);
        let axis = self.cfg.factor_axis;
        let start = crate::astro::night::local_noon(s.site, s.from)?;
        let mut extreme: f64 = 0.0;
        for e in earth_year(start)?.iter() {
            let (a, b) = parallax_factors(*e, place.ra_rad, place.dec_rad);
            extreme = extreme.max(axis.value(a, b));
        }
        let threshold = self.cfg.factor_fraction * extreme;
        let dates: Vec<NaiveDate> = (0..=n)
            .filter_map(|i| s.from.checked_add_days(chrono::Days::new(i as u64)))
            .collect();
        use rayon::prelude::*;
        let nights: Vec<NightFactor> = dates
            .par_iter()
            .map(|d| self.night_factor(s, *d, &place, &lim, threshold))
            .collect::<Result<Vec<_>>>()?;
        Ok(Series {
            nights,
            yearly_extreme: extreme,
            threshold,
            axis,
        })
    }

    fn night_factor(
        &self,
        s: &Setting,
        date: NaiveDate,
        place: &CatalogPlace,
        lim: &Limits,
        threshold: f64,
    ) -> Result<NightFactor> {
        let night = Night::shared(s.site, date)?;
        let tn = night.windows(place, lim);
        let (best, usable) = self.best_in_windows(&night.track(place), &tn);
        let mid = night
            .start
            .add_seconds(night.end.seconds_since(&night.start) / 2.0);
        let t_eval = best.map(|b| b.0).unwrap_or(mid);
        let (pf_ra, pf_dec) = parallax_factors(
            night.context(t_eval).earth_bary_au(),
            place.ra_rad,
            place.dec_rad,
        );
        let factor = self.cfg.factor_axis.value(pf_ra, pf_dec);
        let observable = best.is_some();
        Ok(NightFactor {
            night: date,
            pf_ra,
            pf_dec,
            factor,
            observable,
            candidate: observable && factor >= threshold,
            best_time: best.map(|b| b.0),
            hour_angle_h: best.map(|b| b.1.to_degrees() / 15.0),
            airmass: best.map(|b| b.2),
            usable_min: usable as f64 * WINDOW_STEP_S / 60.0,
        })
    }

    /// The rule of a night's epoch: instants every [`WINDOW_STEP_S`] from the
    /// start of each window, plus the transit when it lies in one; an instant
    /// is usable when |HA| is within the limit and the airmass at most the
    /// maximum; the epoch is the usable instant nearest the meridian. Returns
    /// (instant, hour angle in radians, airmass) of the epoch and the count of
    /// usable instants (the transit not counted).
    ///
    /// The usable instants of a window are those inside the hour-angle
    /// interval around a transit where both limits hold (the altitude falls
    /// and |HA| grows away from the transit), so the closed form of the
    /// target's [`Track`] gives their index range; the instants at its ends
    /// and the candidates nearest the meridian are checked on the exact place.
    fn best_in_windows(
        &self,
        track: &Track,
        tn: &TargetNight,
    ) -> (Option<(Instant, f64, f64)>, usize) {
        let ha_lim_rad = (self.cfg.ha_limit_h * 15.0).to_radians();
        let ok = |o: &Observed| -> Option<f64> {
            let x = kasten_young(o.alt_rad.to_degrees())?;
            (o.ha_rad.abs() <= ha_lim_rad && x <= self.cfg.max_airmass).then_some(x)
        };
        let frame = track.frame();
        // Hour-angle half-width of the usable interval, closed form.
        let alt_x = altitude_for_airmass_deg(self.cfg.max_airmass).unwrap_or(0.0);
        let h_use = track
            .half_width_above(frame.refraction().geometric(alt_x.to_radians()))
            .map(|h| h.min(ha_lim_rad));
        let mut best: Option<(Instant, f64, f64, f64)> = None; // (t, |ha|, airmass, ha)
        let mut usable = 0usize;
        let mut consider = |t: Instant, o: &Observed, x: f64| {
            if best.is_none_or(|b| o.ha_rad.abs() < b.1) {
                best = Some((t, o.ha_rad.abs(), x, o.ha_rad));
            }
        };
        for (wa, wb) in &tn.windows {
            let a = frame.offset(*wa);
            let k = (wb.seconds_since(wa) / WINDOW_STEP_S).floor() as i64;
            let at = |i: i64| a + i as f64 * WINDOW_STEP_S;
            let obs = |i: i64| track.observe(at(i));
            let good = |i: i64| ok(&obs(i)).is_some();
            if let Some(h) = h_use {
                let w = h / crate::astro::visibility::ERA_RATE_RAD_S;
                // One usable stretch around each transit (the whole window
                // when the limits allow every hour angle).
                let stretches: Vec<(f64, f64)> = if h >= std::f64::consts::PI {
                    vec![(a, at(k))]
                } else {
                    track
                        .transits_linear(a - w - 60.0, at(k) + w + 60.0)
                        .iter()
                        .map(|s| (s - w, s + w))
                        .collect()
                };
                for (lo, hi) in stretches {
                    let mut i0 = (((lo - a) / WINDOW_STEP_S).ceil() as i64).clamp(0, k + 1);
                    let mut i1 = (((hi - a) / WINDOW_STEP_S).floor() as i64).clamp(-1, k);
                    // The closed form is good to well under a second: settle
                    // the instants at the ends on the exact place.
                    while i0 <= i1 && !good(i0) {
                        i0 += 1;
                    }
                    while i0 > 0 && i0 <= k && good(i0 - 1) {
                        i0 -= 1;
                    }
                    while i1 >= i0 && !good(i1) {
                        i1 -= 1;
                    }
                    while i1 >= i0 && i1 < k && good(i1 + 1) {
                        i1 += 1;
                    }
                    if i1 < i0 {
                        continue;
                    }
                    usable += (i1 - i0 + 1) as usize;
                    // Nearest the meridian: when the transit lies in the
                    // window it is usable itself (considered below) or no
                    // instant is; otherwise the nearest is an end of the range.
                    for i in [i0, i1] {
                        let o = obs(i);
                        if let Some(x) = ok(&o) {
                            consider(frame.instant(at(i)), &o, x);
                        }
                    }
                }
            }
            if let Some(tr) = tn.transit.t
                && tr.seconds_since(wa) >= 0.0
                && wb.seconds_since(&tr) >= 0.0
            {
                let o = track.observe_at(tr);
                if let Some(x) = ok(&o) {
                    consider(tr, &o, x);
                }
            }
        }
        (best.map(|b| (b.0, b.3, b.2)), usable)
    }

    /// Why a series offers no candidate night, as one line.
    fn no_candidates(&self, s: &Setting, series: &Series) -> String {
        let lim = self.effective_limits(s);
        if series.nights.iter().any(|n| n.observable) {
            format!(
                "'{}' is observable {} on some nights between {} and {}, but never while its {} parallax factor is ≥ {:.0} % of its yearly extreme: lower the fraction, choose another axis, or widen the hour-angle limit",
                s.target.name,
                fmt_limits(&self.cfg, &lim),
                s.from,
                s.to,
                self.cfg.factor_axis.as_str(),
                100.0 * self.cfg.factor_fraction
            )
        } else {
            format!(
                "'{}' is never observable {} between {} and {}",
                s.target.name,
                fmt_limits(&self.cfg, &lim),
                s.from,
                s.to
            )
        }
    }

    /// An epoch at `t` with exposure for `snr` from the exposure model.
    fn make_epoch(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        ctx: &Context,
        snr: f64,
        night: Option<NaiveDate>,
        season: usize,
    ) -> Result<PlannedEpoch> {
        let place = s.target.place();
        let mag = target_mag(s.target)?;
        let o = ctx.observe(&place);
        let alt = o.alt_rad.to_degrees();
        let x = kasten_young(alt).ok_or_else(|| {
            RungError::invalid(
                format!("epoch {}", ctx.t.iso()),
                format!(
                    "'{}' is below the horizon then (altitude {alt:.1}°)",
                    s.target.name
                ),
            )
        })?;
        let (exptime_s, n_exp) = em.exptime(mag, &s.target.band, snr, ctx, &place)?;
        let got = em.snr(mag, &s.target.band, exptime_s, ctx, &place)?;
        let visit_s = exptime_s + n_exp as f64 * em.readout_s() + em.visit_overhead_s();
        let (pf_ra, pf_dec) = parallax_factors(ctx.earth_bary_au(), place.ra_rad, place.dec_rad);
        Ok(PlannedEpoch {
            night,
            season,
            epoch: Epoch {
                time: ctx.t,
                exptime_s,
                n_exposures: n_exp,
                snr: got,
                airmass: x,
                visit_s,
                exposures: crate::ladder::BandExposure::single(
                    &s.target.band,
                    exptime_s,
                    n_exp,
                    got,
                ),
            },
            pf_ra,
            pf_dec,
            hour_angle_h: o.ha_rad.to_degrees() / 15.0,
            sigma_mas: epoch_sigma_mas(em.seeing_fwhm_arcsec(), got, x, &self.cfg)?,
        })
    }

    /// Epochs at a user's instants (exposure for the configured SNR).
    pub fn epochs_at(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        times: &[Instant],
    ) -> Result<Vec<PlannedEpoch>> {
        if times.is_empty() {
            return Err(RungError::invalid(
                "epoch list",
                "it is empty: give at least three epochs",
            ));
        }
        times
            .iter()
            .map(|t| {
                let ctx = Context::exact(s.site, *t)?;
                self.make_epoch(s, em, &ctx, self.cfg.snr, None, 0)
            })
            .collect()
    }

    /// Planned epochs from shared-face epochs (factors from `epv00`, errors from their SNR and airmass).
    pub fn planned_from(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: &[Epoch],
    ) -> Result<Vec<PlannedEpoch>> {
        let place = s.target.place();
        epochs
            .iter()
            .map(|e| {
                let ctx = Context::exact(s.site, e.time)?;
                let (pf_ra, pf_dec) =
                    parallax_factors(ctx.earth_bary_au(), place.ra_rad, place.dec_rad);
                Ok(PlannedEpoch {
                    night: None,
                    season: 0,
                    epoch: e.clone(),
                    pf_ra,
                    pf_dec,
                    hour_angle_h: ctx.observe(&place).ha_rad.to_degrees() / 15.0,
                    sigma_mas: epoch_sigma_mas(
                        em.seeing_fwhm_arcsec(),
                        e.snr,
                        e.airmass,
                        &self.cfg,
                    )?,
                })
            })
            .collect()
    }

    /// The proposed plan: `epochs_per_season` nights spread over each season
    /// of candidate nights, exposure for the configured SNR, and its precision.
    pub fn plan(&self, s: &Setting, em: &dyn ExposureModel) -> Result<ParallaxPlan> {
        let plx = expected_parallax_mas(s.target)?;
        target_mag(s.target)?;
        let series = self.series(s)?;
        let seasons = series.seasons(self.cfg.season_gap_d);
        if seasons.is_empty() {
            return Err(RungError::invalid("target", self.no_candidates(s, &series)));
        }
        let mut epochs = Vec::new();
        for (si, season) in seasons.iter().enumerate() {
            for i in spread(
                &series,
                season,
                self.cfg.epochs_per_season as usize,
                self.cfg.ha_limit_h,
            ) {
                let nf = &series.nights[i];
                if let Some(t) = nf.best_time {
                    let ctx = Night::shared(s.site, nf.night)?.context(t);
                    epochs.push(self.make_epoch(
                        s,
                        em,
                        &ctx,
                        self.cfg.snr,
                        Some(nf.night),
                        si + 1,
                    )?);
                }
            }
        }
        self.finish(s, plx, series, seasons.len(), epochs, None)
    }

    /// The plan for a user's epochs.
    pub fn plan_for(&self, s: &Setting, epochs: Vec<PlannedEpoch>) -> Result<ParallaxPlan> {
        let plx = expected_parallax_mas(s.target)?;
        if epochs.is_empty() {
            return Err(RungError::invalid(
                "epoch list",
                "it is empty: give at least three epochs",
            ));
        }
        if epochs.len() < 3 {
            // Refuse before the (slow) factor series; `solve` words it.
            let obs: Vec<EpochObs> = epochs
                .iter()
                .map(|e| EpochObs {
                    t_yr: e.epoch.time.julian_epoch_tt(),
                    pf_ra: e.pf_ra,
                    pf_dec: e.pf_dec,
                    sigma_mas: e.sigma_mas,
                })
                .collect();
            solve(&obs)?;
        }
        let series = self.series(s)?;
        let n = series.seasons(self.cfg.season_gap_d).len();
        let outside: Vec<String> = epochs
            .iter()
            .filter(|e| {
                e.hour_angle_h.abs() > self.cfg.ha_limit_h || e.epoch.airmass > self.cfg.max_airmass
            })
            .map(|e| e.epoch.time.round_to_second().iso())
            .collect();
        let mut plan = self.finish(s, plx, series, n, epochs, None)?;
        if !outside.is_empty() {
            plan.prediction.notes.push(format!(
                "{} epoch(s) lie outside ±{:.1} h of the meridian or above airmass {:.2} (DCR grows with tan z): {}",
                outside.len(),
                self.cfg.ha_limit_h,
                self.cfg.max_airmass,
                outside.join(", ")
            ));
        }
        Ok(plan)
    }

    fn finish(
        &self,
        s: &Setting,
        plx: f64,
        series: Series,
        seasons_available: usize,
        epochs: Vec<PlannedEpoch>,
        verdict: Option<Verdict>,
    ) -> Result<ParallaxPlan> {
        let obs: Vec<EpochObs> = epochs
            .iter()
            .map(|e| EpochObs {
                t_yr: e.epoch.time.julian_epoch_tt(),
                pf_ra: e.pf_ra,
                pf_dec: e.pf_dec,
                sigma_mas: e.sigma_mas,
            })
            .collect();
        let sol = solve(&obs)?;
        let pct = 100.0 * sol.sigma_parallax_mas / plx;
        let hours = epochs.iter().map(|e| e.epoch.visit_s).sum::<f64>() / 3600.0;
        let mut notes = self.notes(plx, &sol, pct);
        let verdict = match verdict {
            Some(v) => v,
            None => match s.target.goal_pct {
                Some(g) if pct > g => {
                    notes.push(format!(
                        "these epochs give {pct:.1} %, short of the target's goal of {g:.1} %: see goal mode"
                    ));
                    Verdict::NeedsMoreSeasons { seasons: None }
                }
                _ if pct.is_finite() => Verdict::Reachable,
                _ => Verdict::NeedsMoreSeasons { seasons: None },
            },
        };
        let prediction = Prediction {
            kind: Kind::Parallax,
            epochs: epochs.iter().map(|e| e.epoch.clone()).collect(),
            distance_precision_pct: pct,
            hours_needed: hours,
            verdict,
            notes,
            error_terms: parallax_terms(pct),
        };
        Ok(ParallaxPlan {
            parallax_mas: plx,
            ellipse: parallactic_ellipse(s.target.place().ra_rad, s.target.place().dec_rad, plx),
            series,
            seasons_available,
            epochs,
            solution: Some(sol),
            prediction,
            reach: None,
        })
    }

    fn notes(&self, plx: f64, sol: &Solution, pct: f64) -> Vec<String> {
        let mut notes = Vec::new();
        if pct > self.cfg.lutz_kelker_pct {
            notes.push(format!(
                "σ_ϖ/ϖ = {pct:.1} % exceeds {:.0} %: 1/ϖ is a biased distance estimate (Lutz & Kelker 1973); do not quote it as the distance",
                self.cfg.lutz_kelker_pct
            ));
        }
        if sol.corr_parallax_pm.abs() > 0.7 || sol.baseline_yr < 1.5 {
            notes.push(format!(
                "baseline {:.2} yr, parallax–proper-motion correlation {:+.2}: proper motion and parallax separate only over about two years or more",
                sol.baseline_yr, sol.corr_parallax_pm
            ));
        }
        notes.push(format!(
            "σ_ϖ = {:.2} mas for ϖ = {plx:.2} mas from {} epochs; per-epoch floor {:.1} mas, DCR {:.1} mas per tan z",
            sol.sigma_parallax_mas, sol.n_epochs, self.cfg.floor_mas, self.cfg.dcr_mas_per_tanz
        ));
        notes
    }

    /// Goal mode: the cheapest plan (fewest telescope hours) that reaches
    /// `goal_pct` = 100 σ_ϖ/ϖ within the range, searching the number of
    /// seasons (from the first), epochs per season (`epochs_per_season` to
    /// `max_epochs_per_season`, so that a lost night does not break a season)
    /// and the SNR levels of `goal_snr_steps`; or the verdict that says why not.
    ///
    /// Why not is one test, [`Reach`]: the range's candidate nights continued
    /// year by year to [`HORIZON_YEARS`] at the highest SNR tried. When some
    /// number of seasons within the horizon reaches the goal the verdict is
    /// `NeedsMoreSeasons` with that number (so the floor over the horizon is
    /// below the goal); when none does it is `LimitedByFloor` with the best
    /// over the horizon (above the goal). Both come from the same nights
    /// whatever the range, so every range gives the same kind of answer. The
    /// per-epoch floor of SCIENCE.md is an error of each epoch, independent
    /// between epochs, so it averages down with more epochs: what limits a
    /// range that falls short is its length, not the floor.
    pub fn goal_plan(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
    ) -> Result<ParallaxPlan> {
        if !(goal_pct.is_finite() && goal_pct > 0.0) {
            return Err(RungError::invalid(
                "distance-precision goal",
                format!("{goal_pct} % must be positive"),
            ));
        }
        let plx = expected_parallax_mas(s.target)?;
        let mag = target_mag(s.target)?;
        let series = self.series(s)?;
        let seasons = series.seasons(self.cfg.season_gap_d);
        let place = s.target.place();
        let ellipse = parallactic_ellipse(place.ra_rad, place.dec_rad, plx);
        let empty = |verdict: Verdict, notes: Vec<String>, series: Series, n: usize| ParallaxPlan {
            parallax_mas: plx,
            ellipse,
            series,
            seasons_available: n,
            epochs: Vec::new(),
            solution: None,
            prediction: Prediction {
                kind: Kind::Parallax,
                epochs: Vec::new(),
                distance_precision_pct: f64::INFINITY,
                hours_needed: 0.0,
                verdict,
                notes,
                error_terms: Vec::new(),
            },
            reach: None,
        };
        if seasons.is_empty() {
            let why = self.no_candidates(s, &series);
            let when = series
                .nights
                .iter()
                .find(|n| n.observable)
                .map(|n| format!("observable from {} but at a small parallax factor", n.night));
            return Ok(empty(Verdict::NotObservable { when }, vec![why], series, 0));
        }
        let need_mas = goal_pct / 100.0 * plx;
        let fwhm = em.seeing_fwhm_arcsec();
        // Contexts at every candidate's best time, once.
        let cand: Vec<usize> = seasons.iter().flatten().copied().collect();
        let ctxs: HashMap<usize, Context> = {
            use rayon::prelude::*;
            cand.par_iter()
                .filter_map(|i| series.nights[*i].best_time.map(|t| (*i, t)))
                .map(|(i, t)| {
                    Night::shared(s.site, series.nights[i].night).map(|n| (i, n.context(t)))
                })
                .collect::<Result<Vec<_>>>()?
                .into_iter()
                .collect()
        };
        let obs_for =
            |idx: &[usize], sigma: &dyn Fn(usize) -> Result<f64>| -> Result<Vec<EpochObs>> {
                idx.iter()
                    .map(|i| {
                        let n = &series.nights[*i];
                        let t = n.best_time.map(|t| t.julian_epoch_tt()).unwrap_or(f64::NAN);
                        Ok(EpochObs {
                            t_yr: t,
                            pf_ra: n.pf_ra,
                            pf_dec: n.pf_dec,
                            sigma_mas: sigma(*i)?,
                        })
                    })
                    .collect()
            };
        let mut exp_cache: ExposureCache = HashMap::new();
        let mut best: Option<(f64, usize, usize, usize, f64)> = None; // hours, seasons, k, snr index, sigma
        let mut first_exp_error: Option<String> = None;
        let kmax = self.cfg.max_epochs_per_season as usize;
        for ns in 1..=seasons.len() {
            for k in (self.cfg.epochs_per_season as usize)..=kmax {
                let idx: Vec<usize> = seasons[..ns]
                    .iter()
                    .flat_map(|se| spread(&series, se, k, self.cfg.ha_limit_h))
                    .collect();
                if idx.len() < 3 {
                    continue;
                }
                for (si, snr) in self.cfg.goal_snr_steps.iter().enumerate() {
                    let sig = |i: usize| {
                        epoch_sigma_mas(
                            fwhm,
                            *snr,
                            series.nights[i].airmass.unwrap_or(1.0),
                            &self.cfg,
                        )
                    };
                    let Ok(sol) = solve(&obs_for(&idx, &sig)?) else {
                        continue;
                    };
                    if sol.sigma_parallax_mas > need_mas {
                        continue;
                    }
                    let mut hours = 0.0;
                    let mut ok = true;
                    for i in &idx {
                        let r = exp_cache.entry((*i, si)).or_insert_with(|| {
                            let ctx = &ctxs[i];
                            em.exptime(mag, &s.target.band, *snr, ctx, &place)
                                .map(|(e, n)| {
                                    (e, n, e + n as f64 * em.readout_s() + em.visit_overhead_s())
                                })
                                .map_err(|e| e.to_string())
                        });
                        match r {
                            Ok((_, _, v)) => hours += *v / 3600.0,
                            Err(e) => {
                                first_exp_error.get_or_insert_with(|| e.clone());
                                ok = false;
                                break;
                            }
                        }
                    }
                    if ok && best.is_none_or(|b| hours < b.0) {
                        best = Some((hours, ns, k, si, sol.sigma_parallax_mas));
                    }
                    break; // higher SNR at the same epochs only costs more
                }
            }
        }
        if let Some((_, ns, k, si, _)) = best {
            let snr = self.cfg.goal_snr_steps[si];
            let mut epochs = Vec::new();
            for (sn, se) in seasons[..ns].iter().enumerate() {
                for i in spread(&series, se, k, self.cfg.ha_limit_h) {
                    epochs.push(self.make_epoch(
                        s,
                        em,
                        &ctxs[&i],
                        snr,
                        Some(series.nights[i].night),
                        sn + 1,
                    )?);
                }
            }
            let n = seasons.len();
            let mut plan = self.finish(s, plx, series, n, epochs, Some(Verdict::Reachable))?;
            plan.prediction.notes.insert(
                0,
                format!(
                    "goal {goal_pct:.1} %: {ns} season(s) × {k} epoch(s) at SNR {snr:.0} reach {:.2} % in {:.2} h",
                    plan.prediction.distance_precision_pct, plan.prediction.hours_needed
                ),
            );
            return Ok(plan);
        }
        // Why not: continue the range's candidate nights year by year to the
        // planning horizon, at the highest SNR the search tries, and count the
        // seasons that would reach the goal (or give the horizon's floor).
        let reach = self.reach(s, &series, fwhm, goal_pct, plx)?;
        let snr_top = reach.snr;
        let mut notes = Vec::new();
        if let Some(e) = &first_exp_error {
            notes.push(format!("the exposure model refused some epochs: {e}"));
        }
        let span_yr = (s.to - s.from).num_days() as f64 / 365.25 + 1.0 / 365.25;
        let per_epoch = format!(
            "at SNR {snr_top:.0} per epoch (the highest tried) with the {:.1} mas floor and DCR",
            self.cfg.floor_mas
        );
        let range_best = match reach.range_best_pct {
            Some(p) => format!(
                "the range's {} season(s) × up to {kmax} epochs reach at best {p:.1} %",
                seasons.len()
            ),
            None => format!(
                "the range's {} candidate night(s) are too few to fit position, proper motion and parallax",
                seasons.iter().map(|se| se.len()).sum::<usize>()
            ),
        };
        if span_yr < 2.0 || reach.range_corr_parallax_pm.is_none_or(|c| c.abs() > 0.7) {
            notes.push(format!(
                "the range {}..{} ({span_yr:.1} yr, {} season(s)) is too short a baseline to separate proper motion from parallax",
                s.from,
                s.to,
                seasons.len()
            ));
        }
        if !reach.full_year {
            notes.push(
                "the range covers less than a year and the nights after it are outside rung's span, so the other season of each year is not counted: give a range of two years or more".to_string(),
            );
        }
        let horizon = format!(
            "{} season(s) in the {:.0} years from {}",
            reach.horizon_seasons, reach.horizon_yr, s.from
        );
        let verdict = match (reach.seasons_needed, reach.floor_pct) {
            (Some(n), _) if first_exp_error.is_some() && n <= seasons.len() => {
                notes.push(format!(
                    "{per_epoch}, {range_best}: the goal is within reach of the range's seasons, but the exposure model refuses the epochs"
                ));
                Verdict::NotObservable {
                    when: Some("the exposure model refuses its epochs".to_string()),
                }
            }
            (Some(n), Some(fp)) => {
                let by = reach
                    .reached_by
                    .map(|d| {
                        format!(
                            ", through about {d} ({:.1} years from {})",
                            ((d - s.from).num_days() + 1) as f64 / 365.25,
                            s.from
                        )
                    })
                    .unwrap_or_default();
                notes.push(format!(
                    "{per_epoch}, {range_best}, short of {goal_pct:.1} %; the same candidate nights continued year by year reach it after {n} season(s) in all{by}; the floor over {horizon} is {fp:.1} %"
                ));
                Verdict::NeedsMoreSeasons {
                    seasons: Some(n as u32),
                }
            }
            (None, Some(fp)) => {
                notes.push(format!(
                    "{per_epoch}, {range_best}; even continued year by year, {horizon} reach at best {fp:.1} %, short of {goal_pct:.1} %: independent per-epoch errors average down only as the square root of the number of epochs"
                ));
                Verdict::LimitedByFloor { floor_pct: fp }
            }
            (_, None) => {
                notes.push(format!(
                    "{per_epoch}, {range_best}; even continued year by year over {horizon}, these candidate nights cannot separate position, proper motion and parallax: choose another factor axis or a lower factor fraction"
                ));
                Verdict::NeedsMoreSeasons { seasons: None }
            }
        };
        let n = seasons.len();
        let mut plan = empty(verdict, notes, series, n);
        plan.reach = Some(reach);
        Ok(plan)
    }
    /// How far the range's candidate nights go toward `goal_pct` when they are
    /// continued year by year to [`HORIZON_YEARS`] from the range start: the
    /// best σ_ϖ/ϖ of the range itself, the fewest seasons (counted from the
    /// range start) that reach the goal, and the best over the horizon (the
    /// floor the goal verdict compares with the goal).
    ///
    /// The schedule is the one the goal search would try at its most generous:
    /// `max_epochs_per_season` nights per season ([`spread`]), each at the
    /// highest SNR of `goal_snr_steps`, per-epoch error from
    /// [`epoch_sigma_mas`] (centroid, floor and DCR in quadrature) and the fit
    /// of [`solve`]. Beyond the range, night j repeats the night a whole number
    /// of 365-day years earlier within the range's last year (factors, hour
    /// angle, airmass and candidacy), its epoch moved by the same number of
    /// days: the parallax factors repeat with the year to about 1e-2 au, and the
    /// 0.24-day drift a year moves them by at most about 0.05 au over the horizon.
    /// A range shorter than a year is first completed to a year with real
    /// nights. Because the per-epoch errors are independent, σ_ϖ only falls as
    /// seasons are added (the normal matrix only grows), so "reached after N
    /// seasons" and "the horizon's floor is below the goal" are the same test.
    fn reach(
        &self,
        s: &Setting,
        series: &Series,
        fwhm_arcsec: f64,
        goal_pct: f64,
        plx: f64,
    ) -> Result<Reach> {
        let snr = self
            .cfg
            .goal_snr_steps
            .last()
            .copied()
            .unwrap_or(self.cfg.snr);
        let kmax = self.cfg.max_epochs_per_season as usize;
        let gap = self.cfg.season_gap_d;
        let need_mas = goal_pct / 100.0 * plx;
        let pct = |sol: &Solution| 100.0 * sol.sigma_parallax_mas / plx;
        let obs_of = |ser: &Series, t_yr: &[f64], idx: &[usize]| -> Result<Vec<EpochObs>> {
            idx.iter()
                .map(|i| {
                    let n = &ser.nights[*i];
                    Ok(EpochObs {
                        t_yr: t_yr[*i],
                        pf_ra: n.pf_ra,
                        pf_dec: n.pf_dec,
                        sigma_mas: epoch_sigma_mas(
                            fwhm_arcsec,
                            snr,
                            n.airmass.unwrap_or(1.0),
                            &self.cfg,
                        )?,
                    })
                })
                .collect()
        };
        let t_of = |n: &NightFactor| n.best_time.map(|t| t.julian_epoch_tt()).unwrap_or(f64::NAN);
        // The range alone.
        let t_range: Vec<f64> = series.nights.iter().map(t_of).collect();
        let range_idx: Vec<usize> = series
            .seasons(gap)
            .iter()
            .flat_map(|se| spread(series, se, kmax, self.cfg.ha_limit_h))
            .collect();
        let range_sol = solve(&obs_of(series, &t_range, &range_idx)?).ok();
        // Real nights to a full year, then the last year repeated.
        let mut nights = series.nights.clone();
        let mut full_year = nights.len() >= YEAR_NIGHTS;
        if !full_year {
            let place = s.target.place();
            let lim = self.effective_limits(s);
            let dates: Vec<NaiveDate> = (nights.len()..YEAR_NIGHTS)
                .filter_map(|i| s.from.checked_add_days(chrono::Days::new(i as u64)))
                .collect();
            use rayon::prelude::*;
            let more = dates
                .par_iter()
                .map(|d| self.night_factor(s, *d, &place, &lim, series.threshold))
                .collect::<Result<Vec<_>>>();
            match more {
                Ok(more) => {
                    nights.extend(more);
                    full_year = true;
                }
                // Near the end of rung's span: repeat what there is.
                Err(RungError::OutOfSpan { .. }) => {}
                Err(e) => return Err(e),
            }
        }
        let mut t_yr: Vec<f64> = nights.iter().map(t_of).collect();
        let n_real = nights.len();
        let horizon_n = n_real.max((HORIZON_YEARS * 365.25).round() as usize);
        for j in n_real..horizon_n {
            let c = (j - n_real) / YEAR_NIGHTS + 1;
            let Some(src) = j.checked_sub(c * YEAR_NIGHTS) else {
                continue;
            };
            let Some(date) = s.from.checked_add_days(chrono::Days::new(j as u64)) else {
                break;
            };
            let mut nf = nights[src].clone();
            nf.night = date;
            nf.best_time = None;
            nights.push(nf);
            t_yr.push(t_yr[src] + (c * YEAR_NIGHTS) as f64 / 365.25);
        }
        let ext = Series {
            nights,
            yearly_extreme: series.yearly_extreme,
            threshold: series.threshold,
            axis: series.axis,
        };
        let ext_seasons = ext.seasons(gap);
        let mut obs: Vec<EpochObs> = Vec::new();
        let mut seasons_needed = None;
        let mut reached_by = None;
        for (k, se) in ext_seasons.iter().enumerate() {
            let idx = spread(&ext, se, kmax, self.cfg.ha_limit_h);
            obs.extend(obs_of(&ext, &t_yr, &idx)?);
            if obs.len() < 3 {
                continue;
            }
            let Ok(sol) = solve(&obs) else {
                continue;
            };
            if seasons_needed.is_none() && sol.sigma_parallax_mas <= need_mas {
                seasons_needed = Some(k + 1);
                reached_by = se.last().map(|i| ext.nights[*i].night);
            }
        }
        // The floor: the fit of every season of the horizon.
        let floor = solve(&obs).ok().map(|sol| pct(&sol));
        Ok(Reach {
            snr,
            range_seasons: series.seasons(gap).len(),
            range_best_pct: range_sol.as_ref().map(pct),
            range_corr_parallax_pm: range_sol.as_ref().map(|x| x.corr_parallax_pm),
            horizon_yr: horizon_n as f64 / 365.25,
            horizon_seasons: ext_seasons.len(),
            floor_pct: floor,
            seasons_needed,
            reached_by,
            full_year,
        })
    }
}

impl Method for ParallaxMethod {
    fn kind(&self) -> Kind {
        Kind::Parallax
    }

    fn config_json(&self) -> serde_json::Value {
        serde_json::to_value(&self.cfg).unwrap_or_default()
    }

    fn as_any(&self) -> &dyn std::any::Any {
        self
    }

    fn propose(&self, s: &Setting, em: &dyn ExposureModel) -> Result<Vec<Epoch>> {
        Ok(self.plan(s, em)?.prediction.epochs)
    }

    fn predict(&self, s: &Setting, em: &dyn ExposureModel, epochs: &[Epoch]) -> Result<Prediction> {
        let plx = expected_parallax_mas(s.target)?;
        if epochs.is_empty() {
            return Err(RungError::invalid(
                "epoch list",
                "it is empty: give at least three epochs",
            ));
        }
        let planned = self.planned_from(s, em, epochs)?;
        let obs: Vec<EpochObs> = planned
            .iter()
            .map(|e| EpochObs {
                t_yr: e.epoch.time.julian_epoch_tt(),
                pf_ra: e.pf_ra,
                pf_dec: e.pf_dec,
                sigma_mas: e.sigma_mas,
            })
            .collect();
        let sol = solve(&obs)?;
        let pct = 100.0 * sol.sigma_parallax_mas / plx;
        let verdict = match s.target.goal_pct {
            Some(g) if pct > g => Verdict::NeedsMoreSeasons { seasons: None },
            _ => Verdict::Reachable,
        };
        Ok(Prediction {
            kind: Kind::Parallax,
            epochs: epochs.to_vec(),
            distance_precision_pct: pct,
            hours_needed: epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0,
            verdict,
            notes: self.notes(plx, &sol, pct),
            error_terms: parallax_terms(pct),
        })
    }

    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        Ok(self.goal_plan(s, em, goal_pct)?.prediction)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The epoch rule sampled as it reads: every WINDOW_STEP_S from each
    /// window's start and the transit, each on the night's own context.
    fn sampled(
        m: &ParallaxMethod,
        night: &Night,
        place: &CatalogPlace,
        tn: &TargetNight,
    ) -> (Option<(Instant, f64, f64)>, usize) {
        let ha_lim = (m.cfg.ha_limit_h * 15.0).to_radians();
        let mut best: Option<(Instant, f64, f64, f64)> = None;
        let mut usable = 0;
        let mut consider = |t: Instant, count: bool| {
            let o = night.context(t).observe(place);
            if let Some(x) = kasten_young(o.alt_rad.to_degrees())
                && o.ha_rad.abs() <= ha_lim
                && x <= m.cfg.max_airmass
            {
                usable += count as usize;
                if best.is_none_or(|b| o.ha_rad.abs() < b.1) {
                    best = Some((t, o.ha_rad.abs(), x, o.ha_rad));
                }
            }
        };
        for (a, b) in &tn.windows {
            let k = (b.seconds_since(a) / WINDOW_STEP_S).floor() as usize;
            for i in 0..=k {
                consider(a.add_seconds(i as f64 * WINDOW_STEP_S), true);
            }
            if let Some(tr) = tn.transit.t
                && tr >= *a
                && tr <= *b
            {
                consider(tr, false);
            }
        }
        (best.map(|b| (b.0, b.3, b.2)), usable)
    }

    #[test]
    fn closed_form_epoch_rule_matches_the_sampled_rule() {
        // Both demo sites, targets from pole to pole, two sets of limits (the
        // built-in ±1 h and airmass 1.5, and a wide ±6 h, airmass 3).
        let sites = crate::io::sites::catalogue().unwrap();
        let mut narrow = ParallaxMethod::builtin().unwrap();
        narrow.cfg.ha_limit_h = 1.0;
        narrow.cfg.max_airmass = 1.5;
        let mut wide = ParallaxMethod::builtin().unwrap();
        wide.cfg.ha_limit_h = 6.0;
        wide.cfg.max_airmass = 3.0;
        let lim = Limits::new(20.0, -12.0).unwrap();
        let (mut compared, mut usable_nights) = (0, 0);
        for site in sites.iter().take(2) {
            for day in ["2026-06-21", "2026-12-01"] {
                let night = Night::new(site, day.parse().unwrap()).unwrap();
                for i in 0..36 {
                    let place =
                        CatalogPlace::fixed_deg(i as f64 * 10.0 + 1.0, -85.0 + i as f64 * 4.9);
                    let tn = night.windows(&place, &lim);
                    for m in [&narrow, &wide] {
                        let want = sampled(m, &night, &place, &tn);
                        let got = m.best_in_windows(&night.track(&place), &tn);
                        assert_eq!(got.1, want.1, "{} {day} #{i}: usable instants", site.name);
                        match (got.0, want.0) {
                            (Some(g), Some(w)) => {
                                assert!(
                                    g.0.seconds_since(&w.0).abs() < 1e-3,
                                    "{} {day} #{i}: {} vs {}",
                                    site.name,
                                    g.0.iso(),
                                    w.0.iso()
                                );
                                assert!((g.1 - w.1).abs() < 1e-6 && (g.2 - w.2).abs() < 1e-6);
                                usable_nights += 1;
                            }
                            (None, None) => {}
                            (g, w) => panic!("{} {day} #{i}: {g:?} vs {w:?}", site.name),
                        }
                        compared += 1;
                    }
                }
            }
        }
        assert!(
            compared == 288 && usable_nights > 80,
            "{compared} compared, {usable_nights} usable"
        );
    }
}
