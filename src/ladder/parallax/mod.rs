//! Trigonometric parallax: parallax factors, the parallactic ellipse, the
//! nights and instants an epoch may be taken at, the error of each epoch,
//! the choice of epochs, and the precision they buy once position, proper
//! motion and parallax are fitted together.
//!
//! Models (docs/science.md, Parallax):
//! - Parallax factors from the Earth's barycentric position (X, Y, Z) in au,
//!   equatorial (BCRS) axes, from SOFA `epv00` at TT:
//!   Pα = X sin α − Y cos α, Pδ = X cos α sin δ + Y sin α sin δ − Z cos δ, so
//!   that the parallactic displacement is Δα cos δ = ϖ Pα, Δδ = ϖ Pδ
//!   (Green, Spherical Astronomy, ch. on parallax; quoted from memory). This is
//!   the first-order term of SOFA `pmpx`'s parallax correction.
//! - The parallactic ellipse has semi-axes ϖ (parallel to the ecliptic) and
//!   ϖ |sin β|, β the ecliptic latitude (Green, from memory).
//! - Per-epoch error by term ([`astrometry`]): the target's centroid, the
//!   reference frame, atmospheric image motion over the exposure (Han 1989),
//!   the residual of the colour correction of refraction, a floor.
//! - Differential chromatic refraction as a systematic ([`astrometry::Dcr`]),
//!   its bias on ϖ computed for the chosen epochs and reported next to σϖ.
//! - Weighted least squares for (x0, y0, μx, μy, ϖ) ([`solve`]); the
//!   correction from relative to absolute parallax adds its own error; σ_d/d
//!   ≈ σ_ϖ/ϖ, and beyond ~10 % the inverse parallax is a biased distance
//!   (Lutz & Kelker 1973).
//!
//! Planning: [`ParallaxMethod::series`] walks the range night by night
//! ([`Night`] and the target's windows above the airmass limit with the Sun
//! below the limit), keeping the usable instants within the hour-angle limit
//! (the earliest, the one nearest the meridian, the latest). Nights whose
//! factor is at least `factor_fraction` of its yearly extreme are offered to
//! the selection ([`select`]), which chooses the epochs that minimise the
//! parallax variance plus the square of the DCR bias (greedy, then exchange,
//! on the fit's information matrix). [`ParallaxMethod::plan`] takes
//! `epochs_per_season` per season; [`ParallaxMethod::goal_plan`] finds the
//! fewest telescope hours that reach a goal over a baseline of at least
//! `min_baseline_yr`, and when the range falls short continues its nights
//! year by year to a horizon to say how many seasons would do, or what the
//! floor is ([`Reach`]). The goal search, the verdict, the budget, the
//! command and the view all use this one selection. Moonlight enters
//! through the exposure model (sky brightness), not as a separate cut.

pub mod astrometry;
mod plan;
pub mod select;

pub use plan::{EpochLevel, ExposureRule, ParallaxGoals};

use crate::astro::airmass::{altitude_for_airmass_deg, kasten_young};
use crate::astro::frames::{CatalogPlace, Observed};
use crate::astro::night::{Limits, Night};
use crate::astro::time::Instant;
use crate::astro::visibility::{ERA_RATE_RAD_S, Sketch, SkyFrame, TRANSIT_REACH_S, Track};
use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{Epoch, ExposureModel, Method, Prediction, Setting, Verdict};
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
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

/// Modelling choices of the parallax method (`config/parallax.toml`, where
/// each value's source is given).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ParallaxConfig {
    /// Per-epoch astrometric floor (detector, optics, centring), mas.
    pub floor_mas: f64,
    /// The random part of chromatic refraction left after its colour
    /// correction, mas per unit tan z.
    pub dcr_mas_per_tanz: f64,
    /// Differential image motion at 600″ separation in 1 s on a 0.76 m
    /// aperture, arcsec: the site's constant of Han (1989).
    pub image_motion_arcsec: f64,
    /// Radius of the field the reference stars are taken from, arcmin.
    pub reference_field_radius_arcmin: f64,
    /// Magnitudes taken as reference stars relative to the target's
    /// (brighter, fainter), when they are estimated.
    pub reference_mag_window_mag: [f64; 2],
    /// The fainter limit of estimated reference stars is at least this
    /// magnitude (a bright target's frame is made of fainter stars).
    pub reference_faintest_mag: f64,
    /// Most reference stars a reduction uses, when they are estimated.
    pub max_reference_stars: f64,
    /// Star counts: stars per square degree brighter than 20 mag at the Galactic pole.
    pub star_counts_pole_per_deg2_at_20: f64,
    /// Star counts: growth, dex per magnitude.
    pub star_counts_slope_per_mag: f64,
    /// Star counts: the latitude below which they stop growing, degrees.
    pub star_counts_min_latitude_deg: f64,
    /// V−I of a target that gives none, mag.
    pub target_color_vi_mag: f64,
    /// V−I of reference stars when the target gives none, mag.
    pub reference_color_vi_mag: f64,
    /// Uncertainty of the correction from relative to absolute parallax, mas.
    pub absolute_correction_mas: f64,
    /// Shortest baseline (first to last epoch) a reachable plan needs, years.
    pub min_baseline_yr: f64,
    /// Hour-angle limit for epochs, hours.
    pub ha_limit_h: f64,
    /// Airmass limit for epochs.
    pub max_airmass: f64,
    /// The Sun's altitude below which parallax epochs may be taken, degrees
    /// (twilight allowed); absent: the programme's limit.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sun_alt_deg: Option<f64>,
    /// A night is offered to the selection when |factor| ≥ this fraction of the yearly extreme.
    pub factor_fraction: f64,
    /// Which factor `factor_fraction` reads.
    pub factor_axis: FactorAxis,
    /// Least signal-to-noise of the target in an epoch.
    pub snr: f64,
    /// Fewest epochs in a plan (the fit's redundancy against outliers and lost nights).
    pub min_epochs: u32,
    /// Epochs proposed per season.
    pub epochs_per_season: u32,
    /// Most epochs in one season.
    pub max_epochs_per_season: u32,
    /// Candidate nights closer than this (days) are one season.
    pub season_gap_d: f64,
    /// σ_ϖ/ϖ (percent) above which the Lutz–Kelker warning is given.
    pub lutz_kelker_pct: f64,
    /// Exposure levels the goal search tries, as multiples of the exposure
    /// that buys the most precision per telescope hour, ascending.
    pub exposure_steps: Vec<f64>,
    /// Longest total exposure of one epoch, seconds.
    pub max_epoch_exptime_s: f64,
    /// A target brighter than its reference stars' typical magnitude by more
    /// than this is attenuated (a neutral-density spot over it) to this
    /// difference, mag.
    #[serde(default = "default_max_target_brighter_mag")]
    pub max_target_brighter_mag: f64,
}

/// `max_target_brighter_mag` when a configuration file gives none (the
/// value of `config/parallax.toml`).
fn default_max_target_brighter_mag() -> f64 {
    3.0
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
        if self.min_epochs < 3 {
            return Err(RungError::invalid(
                "min_epochs",
                format!(
                    "{} cannot determine position, proper motion and parallax: give at least 3",
                    self.min_epochs
                ),
            ));
        }
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
        if self.exposure_steps.is_empty() {
            return Err(RungError::invalid(
                "exposure_steps",
                "give at least one level",
            ));
        }
        for v in &self.exposure_steps {
            pos("exposure_steps", *v)?;
        }
        if self.exposure_steps.windows(2).any(|w| w[1] <= w[0]) {
            return Err(RungError::invalid("exposure_steps", "levels must ascend"));
        }
        crate::bounds::EXPTIME_S.check_as("max_epoch_exptime_s", self.max_epoch_exptime_s)?;
        if !(self.max_target_brighter_mag.is_finite()
            && (0.0..=15.0).contains(&self.max_target_brighter_mag))
        {
            return Err(RungError::invalid(
                "max_target_brighter_mag",
                format!(
                    "{} is not within 0..15 mag (how much brighter than its reference stars a target is observed)",
                    self.max_target_brighter_mag
                ),
            ));
        }
        let non_neg = |what: &str, v: f64, unit: &str| -> Result<()> {
            if v.is_finite() && v >= 0.0 {
                Ok(())
            } else {
                Err(RungError::invalid(
                    what,
                    format!("{v} must be zero or positive ({unit})"),
                ))
            }
        };
        pos("image_motion_arcsec", self.image_motion_arcsec)?;
        pos(
            "reference_field_radius_arcmin",
            self.reference_field_radius_arcmin,
        )?;
        let [lo, hi] = self.reference_mag_window_mag;
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(RungError::invalid(
                "reference_mag_window_mag",
                format!("[{lo}, {hi}] must be two magnitudes, the brighter limit first"),
            ));
        }
        crate::bounds::MAG.check_as("reference_faintest_mag", self.reference_faintest_mag)?;
        crate::bounds::REF_STAR_COUNT.check_as("max_reference_stars", self.max_reference_stars)?;
        pos(
            "star_counts_pole_per_deg2_at_20",
            self.star_counts_pole_per_deg2_at_20,
        )?;
        pos("star_counts_slope_per_mag", self.star_counts_slope_per_mag)?;
        if !(self.star_counts_min_latitude_deg.is_finite()
            && self.star_counts_min_latitude_deg > 0.0
            && self.star_counts_min_latitude_deg <= 90.0)
        {
            return Err(RungError::invalid(
                "star_counts_min_latitude_deg",
                format!(
                    "{} is not within (0, 90] degrees",
                    self.star_counts_min_latitude_deg
                ),
            ));
        }
        crate::bounds::COLOUR_VI_MAG.check_as("target_color_vi_mag", self.target_color_vi_mag)?;
        crate::bounds::COLOUR_VI_MAG
            .check_as("reference_color_vi_mag", self.reference_color_vi_mag)?;
        non_neg(
            "absolute_correction_mas",
            self.absolute_correction_mas,
            "mas",
        )?;
        non_neg("min_baseline_yr", self.min_baseline_yr, "years")?;
        if self.min_baseline_yr > HORIZON_YEARS - 1.0 {
            return Err(RungError::invalid(
                "min_baseline_yr",
                format!(
                    "{} years is beyond what rung plans ({} years from the range start)",
                    self.min_baseline_yr,
                    HORIZON_YEARS - 1.0
                ),
            ));
        }
        if let Some(h) = self.sun_alt_deg
            && !(h.is_finite() && (-90.0..=0.0).contains(&h))
        {
            return Err(RungError::invalid(
                "sun_alt_deg",
                format!("{h} is not within -90..0 degrees"),
            ));
        }
        Ok(self)
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
/// every target of a range, so computed once per start and shared: the
/// memo is held while it is computed, so targets started together (the
/// budget's first rows) wait for one computation instead of each making
/// its own (366 `epv00` calls).
fn earth_year(start: Instant) -> Result<std::sync::Arc<Vec<[f64; 3]>>> {
    use std::sync::{Arc, Mutex, OnceLock};
    type Memo = Mutex<Vec<((u64, u64), Arc<Vec<[f64; 3]>>)>>;
    static MEMO: OnceLock<Memo> = OnceLock::new();
    let key = (start.utc1.to_bits(), start.utc2.to_bits());
    let memo = MEMO.get_or_init(|| Mutex::new(Vec::new()));
    let mut m = memo.lock().unwrap_or_else(|e| e.into_inner());
    if let Some((_, v)) = m.iter().find(|(k, _)| *k == key) {
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
    if m.len() >= 16 {
        m.remove(0);
    }
    m.push((key, v.clone()));
    Ok(v)
}

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
    /// The earliest usable instant (most negative hour angle) of the night.
    pub first_time: Option<Instant>,
    /// The latest usable instant (most positive hour angle) of the night.
    pub last_time: Option<Instant>,
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

/// One epoch's share of the normal equations, the only place they are
/// summed: adds to the normal matrix `n` (weight `w` = 1/σ², σ in mas) and
/// to the DCR vector `b` (Aᵀ W d) the epoch's two rows of the design
/// matrix, [1, 0, Δt, 0, Pα] and [0, 1, 0, Δt, Pδ] (Δt in years from the
/// reference epoch, factors `pf` in au), each with its DCR displacement
/// `dcr_mas` (Δα cos δ, Δδ). The least squares ([`solve`]), the plan's DCR
/// bias and the selection's running sums all call it, so a sum over the same
/// epochs in the same order gives the same bits wherever it is made.
#[inline]
pub(crate) fn add_epoch(
    n: &mut [[f64; 5]; 5],
    b: &mut [f64; 5],
    w: f64,
    dt: f64,
    pf: [f64; 2],
    dcr_mas: [f64; 2],
) {
    for (row, d) in [
        ([1.0, 0.0, dt, 0.0, pf[0]], dcr_mas[0]),
        ([0.0, 1.0, 0.0, dt, pf[1]], dcr_mas[1]),
    ] {
        for i in 0..5 {
            b[i] += w * row[i] * d;
            for j in 0..5 {
                n[i][j] += w * row[i] * row[j];
            }
        }
    }
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
    let mut unused = [0.0f64; 5];
    for o in obs {
        add_epoch(
            &mut n,
            &mut unused,
            1.0 / (o.sigma_mas * o.sigma_mas),
            o.t_yr - tbar,
            [o.pf_ra, o.pf_dec],
            [0.0, 0.0],
        );
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
    /// Error of each coordinate, mas (`terms.total_mas`).
    pub sigma_mas: f64,
    /// That error by term.
    pub terms: astrometry::EpochError,
    /// Signal-to-noise of a typical reference star in the epoch's exposure.
    pub reference_snr: f64,
    /// Tangent of the (observed) zenith distance.
    pub tan_z: f64,
    /// Parallactic angle, degrees.
    pub parallactic_angle_deg: f64,
    /// Differential chromatic refraction of the target against its frame,
    /// (Δα cos δ, Δδ), mas.
    pub dcr_mas: [f64; 2],
}

impl PlannedEpoch {
    /// Differential chromatic refraction of the target against its frame
    /// along the zenith direction, mas: `mas_per_tanz` (the plan's
    /// [`astrometry::Dcr`]) × tan z; positive toward the zenith.
    pub fn dcr_zenith_mas(&self, mas_per_tanz: f64) -> f64 {
        mas_per_tanz * self.tan_z
    }
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
    /// The reference frame the positions are measured against.
    pub reference: astrometry::ReferenceFrame,
    /// Differential chromatic refraction of the target against its frame.
    pub dcr: astrometry::Dcr,
    /// How an epoch's exposure is chosen.
    pub exposure_rule: ExposureRule,
    /// The bias DCR left uncorrected gives ϖ with these epochs, mas (a
    /// systematic: epochs balanced in hour angle between the parallax
    /// seasons make it small).
    pub dcr_bias_mas: Option<f64>,
    /// Uncertainty of the correction from relative to absolute parallax, mas.
    pub absolute_correction_mas: f64,
    /// σϖ of the fit, the DCR bias and the absolute correction in
    /// quadrature, mas: what the distance precision is computed from.
    pub sigma_parallax_total_mas: Option<f64>,
    /// The baseline a reachable plan needs, years.
    pub min_baseline_yr: f64,
    /// Why the verdict is what it is, in one line.
    pub verdict_reason: String,
}

/// How far a range's candidate nights, continued year by year to
/// [`HORIZON_YEARS`] from its start, go toward a distance goal
/// (see `ParallaxMethod::goal_plan`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Reach {
    /// Target SNR per epoch at the exposure assumed (the longest level of
    /// `exposure_steps`), at the reference instant of the exposure rule.
    pub snr: f64,
    /// Total exposure per epoch assumed, seconds.
    pub exptime_s: f64,
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
    /// Baseline of the range's best plan, years.
    pub range_baseline_yr: Option<f64>,
}

/// The epoch of a night's windows (instant, hour angle in radians,
/// airmass), the count of usable instants, and the first and last usable
/// instants.
type WindowBest = (
    Option<(Instant, f64, f64)>,
    usize,
    Option<(Instant, Instant)>,
);

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
    ///
    /// The Sun's limit is the method's `sun_alt_deg` when configured (parallax
    /// epochs of red targets may be taken in twilight), else the setting's.
    pub fn effective_limits(&self, s: &Setting) -> Limits {
        let alt = airmass_altitude_deg(self.cfg.max_airmass).unwrap_or(0.0);
        Limits {
            min_alt_deg: s.limits.min_alt_deg.max(alt),
            sun_alt_deg: self.cfg.sun_alt_deg.unwrap_or(s.limits.sun_alt_deg),
        }
    }

    /// The last night's index of the range (nights − 1), or the refusal of
    /// a range the series cannot cover (reversed, or longer than
    /// [`MAX_RANGE_NIGHTS`]).
    fn range_nights(&self, s: &Setting) -> Result<i64> {
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
        Ok(n)
    }

    /// What [`Self::series`] refuses of a range, without its nights: the
    /// range itself, the first night's local noon, and the first and last
    /// nights (the ephemeris span is one interval, so the nights between
    /// are inside it when both ends are). An empty series on success.
    pub(crate) fn check_range(&self, s: &Setting) -> Result<Series> {
        self.range_nights(s)?;
        crate::astro::night::local_noon(s.site, s.from)?;
        Night::shared(s.site, s.from)?;
        Night::shared(s.site, s.to)?;
        Ok(Series {
            nights: Vec::new(),
            yearly_extreme: 0.0,
            threshold: 0.0,
            axis: self.cfg.factor_axis,
        })
    }

    /// The parallax factor through the setting's range, night by night, with
    /// the observable instant nearest the meridian (windows from
    /// [`Night::target`], sampled every [`WINDOW_STEP_S`] plus the transit),
    /// and the yearly extreme of the chosen axis (daily samples over 366 days
    /// from the range start). Nights are computed in parallel.
    pub fn series(&self, s: &Setting) -> Result<Series> {
        let n = self.range_nights(s)?;
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
        // The range's nights looked up at once (one site key, the missing
        // ones built in parallel), then each night's factor.
        let shared = match (dates.first(), dates.last()) {
            (Some(a), Some(b)) => Night::shared_range(s.site, *a, *b)?,
            _ => Vec::new(),
        };
        let nights: Vec<NightFactor> = shared
            .par_iter()
            .map(|night| self.night_factor(night, &place, &lim, threshold))
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
        night: &Night,
        place: &CatalogPlace,
        lim: &Limits,
        threshold: f64,
    ) -> Result<NightFactor> {
        let (best, usable, ends) = self.night_best(night, place, lim, true);
        Ok(self.factor_of(night, place, threshold, (best, usable, ends)))
    }

    /// The night's [`NightFactor`] from its epoch, usable count and ends
    /// ([`Self::best_in_windows`]).
    fn factor_of(
        &self,
        night: &Night,
        place: &CatalogPlace,
        threshold: f64,
        (best, usable, ends): WindowBest,
    ) -> NightFactor {
        let mid = night
            .start
            .add_seconds(night.end.seconds_since(&night.start) / 2.0);
        let t_eval = best.map(|b| b.0).unwrap_or(mid);
        let (pf_ra, pf_dec) =
            parallax_factors(night.earth_bary_au(t_eval), place.ra_rad, place.dec_rad);
        let factor = self.cfg.factor_axis.value(pf_ra, pf_dec);
        let observable = best.is_some();
        NightFactor {
            night: night.date,
            pf_ra,
            pf_dec,
            factor,
            observable,
            candidate: observable && factor >= threshold,
            best_time: best.map(|b| b.0),
            first_time: ends.map(|e| e.0),
            last_time: ends.map(|e| e.1),
            hour_angle_h: best.map(|b| b.1.to_degrees() / 15.0),
            airmass: best.map(|b| b.2),
            usable_min: usable as f64 * WINDOW_STEP_S / 60.0,
        }
    }

    /// The epoch of a night, its usable instants and their ends
    /// ([`Self::best_in_windows`]). With `settle`, what the closed form
    /// settles is not asked of the exact place: a night whose windows
    /// cannot reach the usable stretches around the transits
    /// ([`Self::idle`]) has none, without its track; the track's windows are
    /// found without the highest altitude in the dark, and the transit only
    /// when it can lie in one ([`Track::windows_and_transit`]). Without
    /// `settle`, the night's full row ([`Night::windows_on`]) and every
    /// instant on the exact place: the same answer (unit test
    /// `settled_nights_are_the_exact_ones`).
    fn night_best(
        &self,
        night: &Night,
        place: &CatalogPlace,
        lim: &Limits,
        settle: bool,
    ) -> WindowBest {
        if !settle {
            let track = night.track(place);
            let tn = night.windows_on(&track, lim);
            return self.best_in_windows(&track, &tn.windows, tn.transit.t, false);
        }
        let sketch = night.sky.sketch(place);
        let dark = night.dark_shared(lim.sun_alt_deg);
        if self.idle(&sketch, &dark, lim) {
            return (None, 0, None);
        }
        let track = sketch.track(place);
        let (windows, transit) = track.windows_and_transit(&night.site, &dark, lim);
        self.best_in_windows(&track, &windows, transit, true)
    }

    /// Hour-angle half-width (radians) of the instants [`usable`] can
    /// accept around a transit, closed form, and its use in
    /// [`Self::best_in_windows`].
    fn usable_half_width(
        &self,
        frame: &SkyFrame,
        half_width_above: impl Fn(f64) -> Option<f64>,
    ) -> Option<f64> {
        let ha_lim_rad = (self.cfg.ha_limit_h * 15.0).to_radians();
        let alt_x = airmass_altitude_deg(self.cfg.max_airmass).unwrap_or(0.0);
        // The series' altitude limit is this one (the airmass limit's
        // altitude) unless the setting's is higher: kept with the night
        // (`SkyFrame::limit_geometric`, the same bits).
        half_width_above(frame.limit_geometric(alt_x.to_radians())).map(|h| h.min(ha_lim_rad))
    }

    /// Whether a night's windows cannot hold a usable instant nor the
    /// transit, from the target's closed form alone: every window lies in
    /// [`Sketch::windows_bound`], every usable stretch
    /// [`Self::best_in_windows`] looks at lies around a closed-form transit
    /// (its half-width from the same closed form), and the refined transit
    /// within [`TRANSIT_REACH_S`] of one; when none of those meet the bound,
    /// the windows give no epoch, no usable instant and no ends (the
    /// stretches' index ranges come out empty without an evaluation).
    fn idle(&self, sketch: &Sketch, dark: &[(Instant, Instant)], lim: &Limits) -> bool {
        let frame = sketch.frame();
        let h_use = self.usable_half_width(frame, |g| sketch.half_width_above(g));
        if h_use.is_some_and(|h| h >= std::f64::consts::PI) {
            return false;
        }
        let dark_s: Vec<(f64, f64)> = dark
            .iter()
            .map(|(a, b)| (frame.offset(*a), frame.offset(*b)))
            .collect();
        let Some(bound) = sketch.windows_bound(&dark_s, lim.min_alt_deg) else {
            return false;
        };
        if bound.is_empty() {
            return true;
        }
        let w = h_use.map_or(0.0, |h| h / ERA_RATE_RAD_S) + TRANSIT_REACH_S + 5.0;
        let transits = sketch.transits_linear(f64::NEG_INFINITY, f64::INFINITY);
        !bound
            .iter()
            .any(|(lo, hi)| transits.iter().any(|s| s - w < *hi && *lo < s + w))
    }

    /// The rule of a night's epoch: instants every [`WINDOW_STEP_S`] from the
    /// start of each window, plus the transit when it lies in one; an instant
    /// is usable when |HA| is within the limit and the airmass at most the
    /// maximum; the epoch is the usable instant nearest the meridian. Returns
    /// (instant, hour angle in radians, airmass) of the epoch, the count of
    /// usable instants (the transit not counted), and the first and last
    /// usable instants of the night. `transit` is the night's first upper
    /// transit (only looked at inside a window).
    ///
    /// The usable instants of a window are those inside the hour-angle
    /// interval around a transit where both limits hold (the altitude falls
    /// and |HA| grows away from the transit), so the closed form of the
    /// target's [`Track`] gives their index range; the instants at its ends
    /// and the candidates nearest the meridian are checked on the exact place.
    /// With `settle`, an instant whose closed form stands clearly on one side
    /// of both limits ([`Track::ha_sure_rad`], [`Track::clearly_above`]) is
    /// taken as the closed form says, and a candidate whose closed-form |HA|
    /// is clearly above a usable candidate's exact one is not evaluated (it
    /// cannot be the nearest the meridian).
    fn best_in_windows(
        &self,
        track: &Track,
        windows: &[(Instant, Instant)],
        transit: Option<Instant>,
        settle: bool,
    ) -> WindowBest {
        let ha_lim_rad = (self.cfg.ha_limit_h * 15.0).to_radians();
        let ok = |o: &Observed| -> Option<f64> {
            let x = kasten_young(o.alt_rad.to_degrees())?;
            (o.ha_rad.abs() <= ha_lim_rad && x <= self.cfg.max_airmass).then_some(x)
        };
        let alt_lim = airmass_altitude_deg(self.cfg.max_airmass);
        let usable_at = |o: &Observed| {
            usable(
                o.alt_rad,
                o.ha_rad,
                ha_lim_rad,
                self.cfg.max_airmass,
                alt_lim,
            )
        };
        let frame = track.frame();
        // Hour-angle half-width of the usable interval, closed form.
        let h_use = self.usable_half_width(frame, |g| track.half_width_above(g));
        // What the closed form settles of an instant's usability: outside
        // the hour-angle limit by more than its margin, or inside it and
        // clearly above the airmass limit's altitude (and clearly below the
        // zenith, where `usable` reads the altitude alone).
        let ha_sure = track.ha_sure_rad().filter(|_| settle);
        let g_alt = alt_lim.map(|l| frame.limit_geometric(l.to_radians()));
        let g_top = 88f64.to_radians();
        let ha_lin = |s: f64| sofars::vm::anpm(track.ha_linear(s)).abs();
        let sure = |s: f64| -> Option<bool> {
            let m = ha_sure?;
            let h = ha_lin(s);
            if h > ha_lim_rad + m {
                return Some(false);
            }
            if h < ha_lim_rad - m
                && track.clearly_above(s, g_alt?)?
                && track.clearly_above(s, g_top) == Some(false)
            {
                return Some(true);
            }
            None
        };
        let mut usable = 0usize;
        let mut ends: Option<(Instant, Instant)> = None;
        // The candidates nearest the meridian, in the order the rule takes
        // them (each stretch's ends, window by window, then the transit),
        // with the exact place when it is already found.
        let mut cands: Vec<(Instant, f64, Option<Observed>)> = Vec::new();
        for (wa, wb) in windows {
            let a = frame.offset(*wa);
            let k = (wb.seconds_since(wa) / WINDOW_STEP_S).floor() as i64;
            let at = |i: i64| a + i as f64 * WINDOW_STEP_S;
            // The instants a stretch's ends settle on are asked again for
            // the nearest to the meridian: each observed once.
            let seen: std::cell::RefCell<Vec<(i64, Observed)>> = Default::default();
            let obs = |i: i64| -> Observed {
                if let Some((_, o)) = seen.borrow().iter().find(|(j, _)| *j == i) {
                    return *o;
                }
                let o = track.observe(at(i));
                seen.borrow_mut().push((i, o));
                o
            };
            let good = |i: i64| sure(at(i)).unwrap_or_else(|| usable_at(&obs(i)));
            if let Some(h) = h_use {
                let w = h / ERA_RATE_RAD_S;
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
                    let (t0, t1) = (frame.instant(at(i0)), frame.instant(at(i1)));
                    ends = Some(match ends {
                        None => (t0, t1),
                        Some((a0, a1)) => {
                            (if t0 < a0 { t0 } else { a0 }, if t1 > a1 { t1 } else { a1 })
                        }
                    });
                    // Nearest the meridian: when the transit lies in the
                    // window it is usable itself (considered below) or no
                    // instant is; otherwise the nearest is an end of the range.
                    for i in [i0, i1] {
                        let known = seen.borrow().iter().find(|(j, _)| *j == i).map(|(_, o)| *o);
                        cands.push((frame.instant(at(i)), at(i), known));
                    }
                }
            }
            if let Some(tr) = transit
                && tr.seconds_since(wa) >= 0.0
                && wb.seconds_since(&tr) >= 0.0
            {
                cands.push((tr, frame.offset(tr), None));
            }
        }
        // The rule takes the first candidate of least exact |HA| among the
        // usable ones. Candidates are evaluated nearest the meridian first
        // (closed form); one whose closed-form |HA| exceeds a usable
        // candidate's exact |HA| by more than the margin has a larger exact
        // |HA| and is left out.
        let mut order: Vec<usize> = (0..cands.len()).collect();
        let lin: Vec<f64> = cands.iter().map(|c| ha_lin(c.1)).collect();
        if ha_sure.is_some() {
            order.sort_by(|x, y| lin[*x].total_cmp(&lin[*y]));
        }
        let mut exact: Vec<Option<(Observed, f64)>> = vec![None; cands.len()];
        let mut least: Option<f64> = None;
        for i in order {
            if let (Some(m), Some(l)) = (ha_sure, least)
                && lin[i] - m > l
            {
                continue;
            }
            let o = cands[i].2.unwrap_or_else(|| track.observe(cands[i].1));
            if let Some(x) = ok(&o) {
                exact[i] = Some((o, x));
                least = Some(least.map_or(o.ha_rad.abs(), |l| l.min(o.ha_rad.abs())));
            }
        }
        let mut best: Option<(Instant, f64, f64, f64)> = None; // (t, |ha|, airmass, ha)
        for (c, e) in cands.iter().zip(&exact) {
            if let Some((o, x)) = e
                && best.is_none_or(|b| o.ha_rad.abs() < b.1)
            {
                best = Some((c.0, o.ha_rad.abs(), *x, o.ha_rad));
            }
        }
        (best.map(|b| (b.0, b.3, b.2)), usable, ends)
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
}

/// [`altitude_for_airmass_deg`] (60 bisection steps, each a `pow`: more
/// than the rest of an idle night's work), the last answer kept per
/// thread: the series asks it of the same limit for every night.
fn airmass_altitude_deg(max_airmass: f64) -> Option<f64> {
    use std::cell::Cell;
    thread_local! {
        static LAST: Cell<Option<(u64, Option<f64>)>> = const { Cell::new(None) };
    }
    let key = max_airmass.to_bits();
    LAST.with(|last| {
        if let Some((k, v)) = last.get()
            && k == key
        {
            return v;
        }
        let v = altitude_for_airmass_deg(max_airmass);
        last.set(Some((key, v)));
        v
    })
}

/// Whether an instant at observed altitude `alt_rad` and hour angle
/// `ha_rad` is usable: |HA| ≤ `ha_lim_rad` and the Kasten–Young airmass at
/// most `max_airmass`, whose altitude is `alt_lim_deg`
/// ([`altitude_for_airmass_deg`]). The airmass itself is computed only
/// where the altitude stands within 1e-6° of that altitude: the airmass
/// falls as the altitude rises, and 1e-6° is 3e-8 in airmass at 1.5, far
/// above its rounding; the same answer as asking the airmass (unit test).
fn usable(
    alt_rad: f64,
    ha_rad: f64,
    ha_lim_rad: f64,
    max_airmass: f64,
    alt_lim_deg: Option<f64>,
) -> bool {
    let within_ha = ha_rad.abs() <= ha_lim_rad;
    if !within_ha {
        return false;
    }
    const CLEAR_DEG: f64 = 1e-6;
    let a = alt_rad.to_degrees();
    match alt_lim_deg {
        Some(l) if a >= l + CLEAR_DEG && a <= 90.0 => true,
        Some(l) if a < l - CLEAR_DEG => false,
        _ => kasten_young(a).is_some_and(|x| x <= max_airmass),
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
        if epochs.is_empty() {
            return Err(RungError::invalid(
                "epoch list",
                "it is empty: give at least three epochs",
            ));
        }
        expected_parallax_mas(s.target)?;
        let planned = self.planned_from(s, em, epochs)?;
        self.prediction_for(s, em, planned)
    }

    fn predict_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra: &[Epoch],
    ) -> Vec<Result<Prediction>> {
        // The base's epochs and exposure rule once; `predict` itself where
        // the base is refused (it words the refusal).
        self.predict_each_extra_shared(s, em, base, extra)
            .unwrap_or_else(|| crate::ladder::predict_each_by_one(self, s, em, base, extra))
    }

    fn predict_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        self.shared_then_each(s, em, base, extra_for, false)
    }

    /// [`Method::predict_then_each_extra`] with each extra epoch's factors
    /// and errors at its night's interpolated context.
    fn rank_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        self.shared_then_each(s, em, base, extra_for, true)
    }

    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        Ok(self.goal_plan(s, em, goal_pct)?.prediction)
    }

    fn goal_search(&self) -> Box<dyn crate::ladder::GoalSearch + '_> {
        Box::new(ParallaxGoals::new(self))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::night::TargetNight;

    /// `usable` gives the answer of the airmass itself (`kasten_young` ≤
    /// the limit, |HA| within its limit) at altitudes spread over the sky and
    /// packed around each limit's altitude, for limits from 1 to past the
    /// horizon's airmass, and at non-finite inputs.
    #[test]
    fn usable_is_the_airmass_test() {
        let reference = |alt_rad: f64, ha_rad: f64, ha_lim: f64, max: f64| {
            kasten_young(alt_rad.to_degrees()).is_some_and(|x| ha_rad.abs() <= ha_lim && x <= max)
        };
        let mut seed = 0x9e37_79b9_7f4a_7c15_u64;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let ha_lim = 1.0f64.to_radians() * 15.0;
        let mut checked = 0;
        for max in [
            0.5,
            1.0,
            1.000_001,
            1.2,
            1.5,
            2.0,
            3.0,
            10.0,
            38.0,
            40.0,
            f64::NAN,
        ] {
            let lim = altitude_for_airmass_deg(max);
            let mut alts: Vec<f64> = (0..2000).map(|_| -5.0 + 100.0 * next()).collect();
            if let Some(l) = lim {
                for k in -400..=400 {
                    alts.push(l + k as f64 * 5e-9);
                    alts.push(l + k as f64 * 1e-6 / 100.0 * 137.0);
                }
                alts.extend([l, l.next_up(), l.next_down(), l + 1e-6, l - 1e-6]);
            }
            alts.extend([0.0, 90.0, 90.0f64.next_up(), -0.0, f64::NAN, f64::INFINITY]);
            for a in alts {
                for ha in [
                    0.0,
                    0.5 * ha_lim,
                    ha_lim,
                    ha_lim.next_up(),
                    -ha_lim,
                    f64::NAN,
                ] {
                    let a_rad = a.to_radians();
                    assert_eq!(
                        usable(a_rad, ha, ha_lim, max, lim),
                        reference(a_rad, ha, ha_lim, max),
                        "alt {a}°, ha {ha}, max airmass {max}"
                    );
                    checked += 1;
                }
            }
        }
        assert!(checked > 100_000);
    }

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
    fn kept_airmass_altitude_is_the_bisection() {
        // The kept answer is the bisection's own, whichever limit was asked before.
        for x in [1.5, 1.5, 2.0, f64::NAN, 1.5, 0.5, 38.0, 40.0, 1.0] {
            assert_eq!(
                airmass_altitude_deg(x).map(f64::to_bits),
                altitude_for_airmass_deg(x).map(f64::to_bits),
                "{x}"
            );
        }
    }

    #[test]
    fn settled_nights_are_the_exact_ones() {
        // A night's epoch, usable count and ends with the closed form's
        // shortcuts (idle nights, settled instants, candidates left out) are
        // those of the night's full row with every instant on the exact
        // place, to the bit: both demo sites, targets from pole to pole,
        // nights through a year, the built-in limits and wide ones, the
        // Sun's limit of the setting and a twilight one.
        let sites = crate::io::sites::catalogue().unwrap();
        let builtin = ParallaxMethod::builtin().unwrap();
        let mut wide = ParallaxMethod::builtin().unwrap();
        wide.cfg.ha_limit_h = 4.0;
        wide.cfg.max_airmass = 2.5;
        let (mut compared, mut with_epoch, mut without) = (0usize, 0usize, 0usize);
        for site in sites.iter().take(2) {
            for d in 0..41 {
                let date = NaiveDate::from_ymd_opt(2026, 12, 1).unwrap() + chrono::Days::new(9 * d);
                let night = Night::new(site, date).unwrap();
                for i in 0..36 {
                    let place =
                        CatalogPlace::fixed_deg(i as f64 * 10.0 + 1.0, -85.0 + i as f64 * 4.9);
                    for (m, sun) in [(&builtin, -12.0), (&wide, -12.0), (&builtin, -6.0)] {
                        let alt = altitude_for_airmass_deg(m.cfg.max_airmass).unwrap();
                        let lim = Limits::new(alt.max(20.0), sun).unwrap();
                        let got = m.night_best(&night, &place, &lim, true);
                        let want = m.night_best(&night, &place, &lim, false);
                        assert_eq!(
                            format!("{got:?}"),
                            format!("{want:?}"),
                            "{} {date} #{i} {} h {sun}",
                            site.name,
                            m.cfg.ha_limit_h
                        );
                        compared += 1;
                        if got.0.is_some() {
                            with_epoch += 1;
                        } else {
                            without += 1;
                        }
                    }
                }
            }
        }
        assert!(
            compared == 2 * 41 * 36 * 3 && with_epoch > 1500 && without > 1500,
            "{compared} {with_epoch} {without}"
        );
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
                        let got = m.best_in_windows(
                            &night.track(&place),
                            &tn.windows,
                            tn.transit.t,
                            true,
                        );
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
