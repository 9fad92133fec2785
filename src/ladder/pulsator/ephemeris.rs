//! The pulsation ephemeris (phase in BJD_TDB and its uncertainty), the
//! single-site day alias, and a pulsator's checked data.

use crate::astro::bary::Bjd;
use crate::astro::frames::CatalogPlace;
use crate::error::{Result, RungError};
use crate::io::targets::Target;
use serde::Serialize;

/// A pulsation ephemeris: period, epoch of maximum light (BJD_TDB) and the
/// period's uncertainty.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Ephemeris {
    /// Period, days.
    pub period_d: f64,
    /// Epoch of a maximum, BJD_TDB.
    pub epoch_max_bjd: f64,
    /// 1σ period uncertainty, days (0 when unknown).
    pub period_err_d: f64,
    /// 1σ uncertainty of the epoch, days (0 when unknown; an ephemeris
    /// fitted to observed maxima has one).
    pub epoch_err_d: f64,
    /// Covariance of epoch and period, days² (0 when unknown).
    pub epoch_period_cov_d2: f64,
}

/// The fractional part in [0, 1) of a number of cycles.
pub fn frac_phase(cycles: f64) -> f64 {
    let f = cycles - cycles.floor();
    if f >= 1.0 { 0.0 } else { f }
}

impl Ephemeris {
    /// A checked ephemeris. Errors name the field: a missing or non-positive
    /// period, a missing epoch, a negative period error.
    pub fn new(
        period_d: Option<f64>,
        epoch_max_bjd: Option<f64>,
        period_err_d: Option<f64>,
    ) -> Result<Self> {
        let p = period_d.ok_or_else(|| {
            RungError::invalid(
                "period_d",
                "is missing: a pulsator needs its period in days",
            )
        })?;
        crate::bounds::PERIOD_D.check(p)?;
        let e = epoch_max_bjd.ok_or_else(|| {
            RungError::invalid(
                "epoch_max_bjd",
                "is missing: give the BJD_TDB of a maximum of light, e.g. 2461000.3276",
            )
        })?;
        if !e.is_finite() || !(2_400_000.0..=2_500_000.0).contains(&e) {
            return Err(RungError::invalid(
                "epoch_max_bjd",
                format!("must be a full BJD_TDB such as 2461000.3276, got {e}"),
            ));
        }
        let s = period_err_d.unwrap_or(0.0);
        if let Some(why) = crate::bounds::period_err_why_not(s, Some(p)) {
            return Err(RungError::invalid("period_err_d", why));
        }
        Ok(Ephemeris {
            period_d: p,
            epoch_max_bjd: e,
            period_err_d: s,
            epoch_err_d: 0.0,
            epoch_period_cov_d2: 0.0,
        })
    }

    /// Cycles elapsed since the epoch, n = (BJD − E0)/P (negative before it).
    pub fn cycles(&self, bjd: &Bjd) -> f64 {
        bjd.days_since(self.epoch_max_bjd) / self.period_d
    }

    /// Phase φ = frac((BJD − E0)/P) in [0, 1); 0 at maximum light. Input: a
    /// two-part BJD_TDB; exact to ~1e-9 cycles over decades (the parts are kept
    /// apart). Source: the linear ephemeris, common practice.
    pub fn phase(&self, bjd: &Bjd) -> f64 {
        frac_phase(self.cycles(bjd))
    }

    /// Phase uncertainty, cycles: σ_φ = σ_T / P with σ_T the timing
    /// uncertainty ([`Self::timing_sigma_d`]); |n| σ_P / P when only the
    /// period's error is known (first-order propagation through
    /// φ = (t − E0)/P; common practice).
    pub fn phase_sigma(&self, bjd: &Bjd) -> f64 {
        self.timing_sigma_d(bjd) / self.period_d
    }

    /// Timing uncertainty of a predicted maximum n cycles from the epoch,
    /// days: σ_T² = σ_E² + n² σ_P² + 2 n cov(E, P); |n| σ_P when the epoch's
    /// error is unknown (a target file gives none).
    pub fn timing_sigma_d(&self, bjd: &Bjd) -> f64 {
        let n = self.cycles(bjd);
        (self.epoch_err_d.powi(2)
            + (n * self.period_err_d).powi(2)
            + 2.0 * n * self.epoch_period_cov_d2)
            .max(0.0)
            .sqrt()
    }
}

/// The day alias a single site samples a period with.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Alias {
    /// Numerator m.
    pub m: i64,
    /// Denominator k.
    pub k: u32,
    /// Beat period 1/|1/P − m/k|, days; `None` when 1/P = m/k exactly (the
    /// same phases come back every k nights and never drift).
    pub beat_period_d: Option<f64>,
}

/// The single-site beat period of a pulsation period.
///
/// A site observes at about the same clock time each night (the night is tied
/// to the solar day), so it samples the frequency f = 1/P (cycles per day)
/// with a one-day step: the phase seen every k nights drifts by k (f − m/k)
/// and the sampled phases run through a whole cycle in the beat period
/// 1/|f − m/k|. The alias m/k is the fraction nearest to f among
/// denominators k = 1..`max_k` (ties go to the smaller k): k = 1 is the daily
/// alias (P near 1 d, 1/2 d, …; for P well beyond a day m = 0 and the beat is
/// P itself), k = 2 the alternate-night alias (P near 2/3 d, 2/5 d, …).
/// With k > 1 the k interleaved nightly sequences sit 1/k apart in phase, so
/// the whole cycle is swept in about beat/k days.
/// Inputs: `period_d` > 0 (days), `max_k` ≥ 1. Source: the classical
/// sampling alias (e.g. Deeming 1975, Ap&SS 36, 137; quoted from memory).
pub fn day_alias(period_d: f64, max_k: u32) -> Alias {
    let f = 1.0 / period_d;
    let mut best = (f64::INFINITY, 0i64, 1u32);
    for k in 1..=max_k.max(1) {
        let m = (f * k as f64).round() as i64;
        let d = (f - m as f64 / k as f64).abs();
        if d < best.0 - 1e-12 {
            best = (d, m, k);
        }
    }
    let (d, m, k) = best;
    Alias {
        m,
        k,
        beat_period_d: if d * period_d < 1e-9 {
            None
        } else {
            Some(1.0 / d)
        },
    }
}

/// A pulsator's data as the method needs them, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct Star {
    /// Ephemeris.
    pub ephemeris: Ephemeris,
    /// Peak-to-peak amplitude, mag (0 when unknown).
    pub amplitude_mag: f64,
    /// Mean magnitude, mag (needed for the distance).
    pub mean_mag: Option<f64>,
    /// Band.
    pub band: String,
    /// Foreground extinction in the band, mag.
    pub extinction_mag: f64,
    /// Catalogue place.
    pub place: CatalogPlace,
    /// Class, when the target gives one (else inferred from the period
    /// where unambiguous, [`super::PulsatorConfig::settle_class`]).
    pub class: Option<super::PulsatorClass>,
    /// Metallicity [Fe/H], dex, when given.
    pub feh_dex: Option<f64>,
    /// Its uncertainty, dex, when given.
    pub feh_err_dex: Option<f64>,
    /// The ephemeris refitted to the observer's times of maximum (the
    /// target's `maxima_bjd`), when given: `ephemeris` is then its `new`,
    /// so every phase and the stale-ephemeris check use the refitted one.
    pub ephemeris_update: Option<super::EphemerisUpdate>,
}

impl Star {
    /// Check a target's pulsator fields (errors name the field and the target).
    pub fn from_target(t: &Target) -> Result<Self> {
        let named = |e: RungError| match e {
            RungError::Invalid { what, why } => RungError::Invalid {
                what: format!("{what} of target '{}'", t.name),
                why,
            },
            other => other,
        };
        let ephemeris =
            Ephemeris::new(t.period_d, t.epoch_max_bjd, t.period_err_d).map_err(named)?;
        use crate::bounds::{AMPLITUDE_MAG, EXTINCTION_MAG, MAG};
        let amplitude_mag = AMPLITUDE_MAG
            .check(t.amplitude_mag.unwrap_or(0.0))
            .map_err(named)?;
        MAG.check_opt_as("mean_mag", t.mean_mag).map_err(named)?;
        EXTINCTION_MAG.check(t.extinction_mag).map_err(named)?;
        if !t.ra_deg.is_finite() || !t.dec_deg.is_finite() || t.dec_deg.abs() > 90.0 {
            return Err(named(RungError::invalid(
                "position",
                format!("ra {} dec {} is not a direction", t.ra_deg, t.dec_deg),
            )));
        }
        let class = if t.class.trim().is_empty() {
            None
        } else {
            Some(super::PulsatorClass::parse(&t.class).map_err(named)?)
        };
        use crate::bounds::{FEH_DEX, FEH_ERR_DEX};
        FEH_DEX.check_opt_as("feh_dex", t.feh_dex).map_err(named)?;
        FEH_ERR_DEX
            .check_opt_as("feh_err_dex", t.feh_err_dex)
            .map_err(named)?;
        let maxima: Vec<super::Maximum> = crate::io::kinds::maxima_list(&t.maxima_bjd)
            .map_err(|why| named(RungError::invalid("maxima_bjd", why)))?
            .into_iter()
            .map(|(bjd, err_d)| super::Maximum { bjd, err_d })
            .collect();
        let (ephemeris, ephemeris_update) = if maxima.is_empty() {
            (ephemeris, None)
        } else {
            let u = super::update_ephemeris(&ephemeris, &maxima).map_err(named)?;
            (u.new, Some(u))
        };
        Ok(Star {
            class,
            feh_dex: t.feh_dex,
            feh_err_dex: t.feh_err_dex,
            ephemeris_update,
            ephemeris,
            amplitude_mag,
            mean_mag: t.mean_mag,
            band: t.band.clone(),
            extinction_mag: t.extinction_mag,
            place: t.place(),
        })
    }

    /// The relation this star uses in its band, with its class and
    /// metallicity settled ([`super::PulsatorConfig::star_relation`]).
    pub fn relation(&self, cfg: &super::PulsatorConfig) -> Result<super::StarRelation> {
        cfg.star_relation(
            self.class,
            &self.band,
            self.ephemeris.period_d,
            self.feh_dex,
            self.feh_err_dex,
        )
    }

    /// Magnitude at the faint phase, mean + amplitude/2 (exposures are sized for it).
    pub fn faint_mag(&self) -> Option<f64> {
        self.mean_mag.map(|m| m + self.amplitude_mag / 2.0)
    }
}
