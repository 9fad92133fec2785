//! The pulsating-star method: phase ephemeris in BJD_TDB, phase coverage from
//! one site, and the distance precision a set of phase points buys through
//! the period–luminosity (Leavitt) relation.
//!
//! Models (SCIENCE.md, Pulsating stars; coefficients in `config/pulsator.toml`):
//! - phase φ = frac((BJD_TDB − E0)/P); its uncertainty from the period's error
//!   after n cycles is σ_φ = |n| σ_P / P (in cycles; the timing error is |n| σ_P
//!   days); past `stale_phase` (0.1) the ephemeris is stale;
//! - single-site day aliasing: beat period 1/|1/P − m/k|, m/k the alias nearest
//!   to 1/P with k ≤ `alias_max_denominator`;
//! - mean magnitude from a K-harmonic Fourier fit by weighted least squares;
//! - Leavitt law M = a (log10 P − 1) + b, μ = m̄ − M − A,
//!   σ_μ² = σ_PL² + σ_m̄² + σ_A², σ_d/d = (ln 10/5) σ_μ.

use crate::astro::bary::{Bjd, bjd_tdb_ctx};
use crate::astro::frames::{CatalogPlace, Context};
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::time::{DAY_S, Instant};
use crate::astro::{pointing, sun_caution};
use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{Epoch, ExposureModel, Method, Prediction, Setting, Verdict};
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::f64::consts::{LN_10, PI};
use std::path::Path;

/// The built-in coefficients and defaults (`config/pulsator.toml`).
pub const BUILTIN_CONFIG: &str = config::PULSATOR.builtin;

/// Magnitude error per unit of inverse signal-to-noise, 2.5/ln 10 = 1.0857
/// (σ_m ≈ 1.0857/SNR for SNR ≫ 1; Howell, Handbook of CCD Astronomy).
pub const MAG_PER_INV_SNR: f64 = 2.5 / LN_10;

/// σ_d/d per magnitude of distance-modulus error: ln 10 / 5 ≈ 0.4605.
pub use super::DIST_FRAC_PER_MAG;

/// Longest span of nights one phase query may cover.
pub const MAX_RANGE_NIGHTS: i64 = 400;

/// A period–luminosity relation in one band: M = a (log10 P − 1) + b.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct LeavittLaw {
    /// Slope, mag per dex of period.
    pub a: f64,
    /// 1σ error of the slope.
    pub a_err: f64,
    /// Absolute magnitude at P = 10 d.
    pub b: f64,
    /// 1σ error of `b`.
    pub b_err: f64,
    /// Intrinsic scatter of single stars about the relation, mag.
    pub scatter_mag: f64,
    /// Where the coefficients come from.
    pub source: String,
}

impl LeavittLaw {
    /// Absolute magnitude M = a (log10 P − 1) + b for period `period_d` (days).
    /// Source: the band's entry in `config/pulsator.toml`.
    pub fn abs_mag(&self, period_d: f64) -> f64 {
        self.a * (period_d.log10() - 1.0) + self.b
    }

    /// Uncertainty of M for one star, mag:
    /// σ_PL² = scatter² + b_err² + ((log10 P − 1) a_err)².
    pub fn sigma_mag(&self, period_d: f64) -> f64 {
        let x = period_d.log10() - 1.0;
        (self.scatter_mag.powi(2) + self.b_err.powi(2) + (x * self.a_err).powi(2)).sqrt()
    }
}

/// Defaults of the method (the `[defaults]` table of `config/pulsator.toml`).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct PulsatorDefaults {
    /// Phase bins of a visit plan.
    pub bins: usize,
    /// Fourier harmonics K.
    pub harmonics: usize,
    /// Phase uncertainty past which the ephemeris is stale, cycles.
    pub stale_phase: f64,
    /// Warn when coverage needs more nights than this.
    pub coverage_nights_warn: usize,
    /// Largest denominator of the day alias m/k.
    pub alias_max_denominator: u32,
    /// Per-point SNR of the default proposal.
    pub propose_snr: f64,
    /// Lowest per-point SNR of a goal plan.
    pub snr_min: f64,
    /// Highest per-point SNR of a goal plan.
    pub snr_max: f64,
    /// Extinction uncertainty as a fraction of the extinction.
    pub extinction_sigma_frac: f64,
}

/// The method's configuration: defaults and one Leavitt law per band.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct PulsatorConfig {
    /// Defaults.
    pub defaults: PulsatorDefaults,
    /// Leavitt laws by band name (U, B, V, R, I).
    pub band: BTreeMap<String, LeavittLaw>,
}

impl PulsatorConfig {
    /// The built-in configuration.
    pub fn builtin() -> Self {
        // The embedded file is checked by the unit test `builtin_config_parses`.
        config::merged(&[config::PULSATOR.builtin_layer()], Self::validated)
            .unwrap_or_else(|e| panic!("built-in config/pulsator.toml is broken: {e}"))
    }

    /// Parse a complete configuration text; `file` names it in error messages.
    pub fn parse(text: &str, file: &Path) -> Result<Self> {
        config::merged(&[Layer::new(text, file)], Self::validated)
    }

    /// The built-in configuration with the user's `pulsator.toml` (user config
    /// folder, `$RUNG_CONFIG_DIR` overrides it) merged over it key by key: a
    /// user file may set only `[defaults] bins = 12`, or add a `[band.B]` table.
    /// `extra`, a file named on the command line, is merged last.
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        config::merged(&config::PULSATOR.layers(extra)?, Self::validated)
    }

    /// The built-in configuration with `text` (the content of `file`) merged over it.
    pub fn merged(text: &str, file: &Path) -> Result<Self> {
        config::merged(
            &[config::PULSATOR.builtin_layer(), Layer::new(text, file)],
            Self::validated,
        )
    }

    /// Check every value; a bad one is `RungError::Invalid` naming its dotted key.
    pub fn validated(self) -> Result<Self> {
        let bad = |field: &str, msg: &str| RungError::invalid(field, msg);
        let d = &self.defaults;
        if !(2..=200).contains(&d.bins) {
            return Err(bad("defaults.bins", "must be within 2..200"));
        }
        if !(1..=10).contains(&d.harmonics) {
            return Err(bad("defaults.harmonics", "must be within 1..10"));
        }
        if !(d.stale_phase > 0.0 && d.stale_phase <= 0.5) {
            return Err(bad(
                "defaults.stale_phase",
                "must be within (0, 0.5] cycles",
            ));
        }
        if !(1..=10).contains(&d.alias_max_denominator) {
            return Err(bad(
                "defaults.alias_max_denominator",
                "must be within 1..10",
            ));
        }
        for (f, v) in [
            ("defaults.propose_snr", d.propose_snr),
            ("defaults.snr_min", d.snr_min),
            ("defaults.snr_max", d.snr_max),
        ] {
            if !(v.is_finite() && v >= 2.0) {
                return Err(bad(f, "must be a signal-to-noise of at least 2"));
            }
        }
        if d.snr_min > d.snr_max {
            return Err(bad("defaults.snr_min", "must not exceed snr_max"));
        }
        if !(d.extinction_sigma_frac.is_finite() && (0.0..=1.0).contains(&d.extinction_sigma_frac))
        {
            return Err(bad("defaults.extinction_sigma_frac", "must be within 0..1"));
        }
        for (name, l) in &self.band {
            for (f, v) in [
                ("a", l.a),
                ("a_err", l.a_err),
                ("b", l.b),
                ("b_err", l.b_err),
                ("scatter_mag", l.scatter_mag),
            ] {
                if !v.is_finite() {
                    return Err(bad(&format!("band.{name}.{f}"), "must be a finite number"));
                }
            }
            if l.a_err < 0.0 || l.b_err < 0.0 || l.scatter_mag < 0.0 {
                return Err(bad(
                    &format!("band.{name}"),
                    "errors and scatter must not be negative",
                ));
            }
        }
        Ok(self)
    }

    /// The Leavitt law of a band, or a clear error naming the bands known.
    pub fn law(&self, band: &str) -> Result<&LeavittLaw> {
        self.band.get(band).ok_or_else(|| RungError::Unknown {
            what: "Leavitt-law band".into(),
            name: band.into(),
            hint: format!(
                "; config/pulsator.toml has {}; add a [band.{band}] table with a, b, scatter and their source",
                self.band.keys().cloned().collect::<Vec<_>>().join(", ")
            ),
        })
    }
}

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

    /// Phase uncertainty from the period's error, cycles: σ_φ = |n| σ_P / P
    /// (first-order propagation of σ_P through φ = (t − E0)/P; common practice).
    /// (The epoch's own error is not in the target data and is not included.)
    pub fn phase_sigma(&self, bjd: &Bjd) -> f64 {
        self.cycles(bjd).abs() * self.period_err_d / self.period_d
    }

    /// Timing uncertainty of a predicted maximum, days: |n| σ_P.
    pub fn timing_sigma_d(&self, bjd: &Bjd) -> f64 {
        self.cycles(bjd).abs() * self.period_err_d
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
        Ok(Star {
            ephemeris,
            amplitude_mag,
            mean_mag: t.mean_mag,
            band: t.band.clone(),
            extinction_mag: t.extinction_mag,
            place: t.place(),
        })
    }

    /// Magnitude at the faint phase, mean + amplitude/2 (exposures are sized for it).
    pub fn faint_mag(&self) -> Option<f64> {
        self.mean_mag.map(|m| m + self.amplitude_mag / 2.0)
    }
}

/// The phases one observable window of one night covers.
#[derive(Debug, Clone, PartialEq)]
pub struct PhaseWindow {
    /// The local date whose evening starts the night.
    pub night: NaiveDate,
    /// Window start (UTC instant).
    pub start: Instant,
    /// Window end.
    pub end: Instant,
    /// BJD_TDB at the start.
    pub bjd_start: Bjd,
    /// BJD_TDB at the end.
    pub bjd_end: Bjd,
    /// Phase at the start, [0, 1).
    pub phase_start: f64,
    /// Phase at the end, [0, 1) (smaller than the start when the window wraps through maximum).
    pub phase_end: f64,
    /// Cycles the window spans ((end − start)/P); ≥ 1 means every phase is reachable.
    pub span_cycles: f64,
}

/// For each night from `from` to `to` (inclusive), the windows when the
/// target is observable under `limits`, with the phases they cover.
///
/// Windows come from the visibility table (`Night::windows`: observed
/// altitude above the limit and the horizon mask, Sun below its limit; edges
/// to 1 ms), the nights in parallel. BJD_TDB at each edge
/// from [`bjd_tdb_ctx`]. Nights with no window are listed in the second vector.
pub fn phase_windows(
    site: &Site,
    star: &Star,
    from: NaiveDate,
    to: NaiveDate,
    limits: &Limits,
) -> Result<(Vec<PhaseWindow>, Vec<NaiveDate>)> {
    let n = (to - from).num_days();
    if n < 0 {
        return Err(RungError::invalid(
            "date range",
            format!("the last night {to} is before the first {from}"),
        ));
    }
    if n >= MAX_RANGE_NIGHTS {
        return Err(RungError::invalid(
            "date range",
            format!("{} nights is more than {MAX_RANGE_NIGHTS}", n + 1),
        ));
    }
    // The nights in parallel (each built once, `Night::shared_range`), each
    // night's windows from the visibility table, then in date order.
    use rayon::prelude::*;
    let nights = Night::shared_range(site, from, to)?;
    let per_night: Vec<Vec<PhaseWindow>> = nights
        .par_iter()
        .map(|night| {
            let tn = night.windows(&star.place, limits);
            tn.windows
                .iter()
                .map(|(a, b)| {
                    let ba = bjd_tdb_ctx(site, &night.context(*a), &star.place);
                    let bb = bjd_tdb_ctx(site, &night.context(*b), &star.place);
                    let e = &star.ephemeris;
                    PhaseWindow {
                        night: night.date,
                        start: *a,
                        end: *b,
                        bjd_start: ba,
                        bjd_end: bb,
                        phase_start: e.phase(&ba),
                        phase_end: e.phase(&bb),
                        span_cycles: (e.cycles(&bb) - e.cycles(&ba)),
                    }
                })
                .collect()
        })
        .collect();
    let mut out = Vec::new();
    let mut empty = Vec::new();
    for (night, ws) in nights.iter().zip(per_night) {
        if ws.is_empty() {
            empty.push(night.date);
        }
        out.extend(ws);
    }
    Ok((out, empty))
}

/// One planned visit of a coverage plan.
#[derive(Debug, Clone, PartialEq)]
pub struct Visit {
    /// The night (local date of its evening).
    pub night: NaiveDate,
    /// Mid-visit instant (UTC).
    pub time: Instant,
    /// BJD_TDB at mid-visit.
    pub bjd: Bjd,
    /// Phase at mid-visit.
    pub phase: f64,
    /// Phase bin, 0-based: bin b covers [b/N, (b+1)/N).
    pub bin: usize,
}

/// A plan of visits that covers phase bins.
#[derive(Debug, Clone, PartialEq)]
pub struct CoveragePlan {
    /// Number of bins N.
    pub bins: usize,
    /// Visits, in time order, one per covered bin.
    pub visits: Vec<Visit>,
    /// Bins covered.
    pub bins_covered: usize,
    /// Bins no night of the range reaches.
    pub missing_bins: Vec<usize>,
    /// The nights the plan uses, in date order.
    pub nights: Vec<NaiveDate>,
}

impl CoveragePlan {
    /// Nights the plan uses.
    pub fn nights_needed(&self) -> usize {
        self.nights.len()
    }
}

/// Bin → (mid instant, dwell seconds) in one night.
type BinReach = BTreeMap<usize, (Instant, f64)>;

/// Where in one night each bin can be visited.
fn night_bins(windows: &[&PhaseWindow], e: &Ephemeris, bins: usize, min_dwell_s: f64) -> BinReach {
    let mut best: BinReach = BTreeMap::new();
    let bin_len_s = e.period_d * DAY_S / bins as f64;
    let need_s = min_dwell_s.min(bin_len_s);
    for w in windows {
        let c0 = e.cycles(&w.bjd_start);
        let c1 = e.cycles(&w.bjd_end);
        let dur_s = w.end.seconds_since(&w.start);
        if c1 <= c0 || dur_s <= 0.0 {
            continue;
        }
        // BJD is linear in UTC across a night to far better than a second
        // (the Rømer delay changes by < 0.2 s per hour, its curvature by µs).
        let s_per_cycle = dur_s / (c1 - c0);
        let first = (c0 * bins as f64).floor() as i64;
        let last = (c1 * bins as f64).floor() as i64;
        for j in first..=last {
            let lo = (j as f64 / bins as f64).max(c0);
            let hi = ((j + 1) as f64 / bins as f64).min(c1);
            if hi <= lo {
                continue;
            }
            let dwell_s = (hi - lo) * s_per_cycle;
            if dwell_s + 1e-6 < need_s {
                continue;
            }
            let bin = j.rem_euclid(bins as i64) as usize;
            let mid = w.start.add_seconds(((lo + hi) / 2.0 - c0) * s_per_cycle);
            if best.get(&bin).is_none_or(|(_, d)| dwell_s > *d) {
                best.insert(bin, (mid, dwell_s));
            }
        }
    }
    best
}

/// A visit plan covering `bins` phase bins with the fewest nights, one visit
/// per bin (so the fewest visits: one per reachable bin).
///
/// Each night reaches the bins its windows cross for at least `min_dwell_s`
/// (or the whole bin when a bin is shorter). Choosing the fewest nights is a
/// set-cover problem; this is the greedy rule (take the night that reaches
/// most uncovered bins, earlier night on ties, until no night adds a bin),
/// which is within a factor H(N) ≈ ln N + 0.58 of the optimum (Chvátal 1979,
/// Math. Oper. Res. 4, 233; quoted from memory) and optimal in the common
/// cases of nights that each reach a contiguous arc. A visit sits at the middle
/// of the longest stretch of its bin in its night.
pub fn plan_coverage(
    windows: &[PhaseWindow],
    e: &Ephemeris,
    bins: usize,
    min_dwell_s: f64,
) -> Result<CoveragePlan> {
    if !(1..=10_000).contains(&bins) {
        return Err(RungError::invalid(
            "bins",
            format!("{bins} is not within 1..10000"),
        ));
    }
    let mut by_night: BTreeMap<NaiveDate, Vec<&PhaseWindow>> = BTreeMap::new();
    for w in windows {
        by_night.entry(w.night).or_default().push(w);
    }
    let reach: Vec<(NaiveDate, BinReach)> = by_night
        .iter()
        .map(|(d, ws)| (*d, night_bins(ws, e, bins, min_dwell_s)))
        .collect();
    let mut covered = vec![false; bins];
    let mut visits = Vec::new();
    let mut nights = Vec::new();
    loop {
        let mut pick: Option<(usize, usize)> = None; // (index, gain)
        for (i, (_, r)) in reach.iter().enumerate() {
            let gain = r.keys().filter(|b| !covered[**b]).count();
            if gain > 0 && pick.is_none_or(|(_, g)| gain > g) {
                pick = Some((i, gain));
            }
        }
        let Some((i, _)) = pick else { break };
        let (date, r) = &reach[i];
        nights.push(*date);
        for (b, (t, _)) in r {
            if !covered[*b] {
                covered[*b] = true;
                let ctx_free_bjd = interpolate_bjd(by_night[date].as_slice(), *t);
                visits.push(Visit {
                    night: *date,
                    time: *t,
                    bjd: ctx_free_bjd,
                    phase: e.phase(&ctx_free_bjd),
                    bin: *b,
                });
            }
        }
    }
    visits.sort_by(|a, b| {
        a.time
            .partial_cmp(&b.time)
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    nights.sort();
    let missing_bins: Vec<usize> = (0..bins).filter(|b| !covered[*b]).collect();
    Ok(CoveragePlan {
        bins,
        bins_covered: bins - missing_bins.len(),
        missing_bins,
        visits,
        nights,
    })
}

/// BJD at an instant inside one of the windows, linear between its edges.
fn interpolate_bjd(ws: &[&PhaseWindow], t: Instant) -> Bjd {
    for w in ws {
        let span = w.end.seconds_since(&w.start);
        let x = t.seconds_since(&w.start);
        if span > 0.0 && (-1.0..=span + 1.0).contains(&x) {
            let db = (w.bjd_end.jd1 - w.bjd_start.jd1) + (w.bjd_end.jd2 - w.bjd_start.jd2);
            return Bjd {
                jd1: w.bjd_start.jd1,
                jd2: w.bjd_start.jd2 + db * x / span,
            };
        }
    }
    let w = ws[0];
    Bjd {
        jd1: w.bjd_start.jd1,
        jd2: w.bjd_start.jd2 + t.seconds_since(&w.start) / DAY_S,
    }
}

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

/// The distance and its error budget for one pulsator.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DistanceBudget {
    /// Absolute magnitude from the Leavitt law, mag.
    pub abs_mag: f64,
    /// Distance modulus μ = m̄ − M − A, mag.
    pub distance_modulus_mag: f64,
    /// Distance, parsecs: 10^(μ/5 + 1).
    pub distance_pc: f64,
    /// The relation's uncertainty for this star, mag.
    pub sigma_pl_mag: f64,
    /// Mean-magnitude error, mag.
    pub sigma_mean_mag: f64,
    /// Extinction error, mag.
    pub sigma_ext_mag: f64,
    /// σ_μ, mag.
    pub sigma_mu_mag: f64,
    /// σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// The best σ_d/d any number of points could reach (σ_m̄ → 0), percent.
    pub floor_pct: f64,
}

impl DistanceBudget {
    /// The budget's terms for the shared [`Prediction`] face; they add in
    /// quadrature to `sigma_mu_mag`.
    pub fn error_terms(&self) -> Vec<super::ErrorTerm> {
        vec![
            super::ErrorTerm::from_mag("period–luminosity relation", self.sigma_pl_mag, false),
            super::ErrorTerm::from_mag("mean magnitude", self.sigma_mean_mag, false),
            super::ErrorTerm::from_mag("extinction", self.sigma_ext_mag, false),
        ]
    }
}

/// Distance modulus μ = m̄ − M(P) − A (mag) from the mean magnitude `mean_mag`,
/// the period `period_d` (days) and the extinction `extinction_mag` in the band.
/// Source: the Leavitt law of the band (config) and m − M = 5 log10(d/10 pc).
pub fn distance_modulus(
    mean_mag: f64,
    period_d: f64,
    extinction_mag: f64,
    law: &LeavittLaw,
) -> f64 {
    mean_mag - law.abs_mag(period_d) - extinction_mag
}

/// The error budget: σ_μ² = σ_PL² + σ_m̄² + σ_A², σ_d/d = (ln 10/5) σ_μ.
/// σ_A = `extinction_sigma_frac` × A. Inputs in mag and days; result as
/// [`DistanceBudget`]. Source: SCIENCE.md (Pulsating stars, Distance).
pub fn distance_budget(
    mean_mag: f64,
    period_d: f64,
    extinction_mag: f64,
    sigma_mean_mag: f64,
    law: &LeavittLaw,
    extinction_sigma_frac: f64,
) -> DistanceBudget {
    let mu = distance_modulus(mean_mag, period_d, extinction_mag, law);
    let s_pl = law.sigma_mag(period_d);
    let s_a = extinction_sigma_frac * extinction_mag;
    let s_mu = (s_pl * s_pl + sigma_mean_mag * sigma_mean_mag + s_a * s_a).sqrt();
    DistanceBudget {
        abs_mag: law.abs_mag(period_d),
        distance_modulus_mag: mu,
        distance_pc: 10f64.powf(mu / 5.0 + 1.0),
        sigma_pl_mag: s_pl,
        sigma_mean_mag,
        sigma_ext_mag: s_a,
        sigma_mu_mag: s_mu,
        distance_precision_pct: 100.0 * DIST_FRAC_PER_MAG * s_mu,
        floor_pct: 100.0 * DIST_FRAC_PER_MAG * (s_pl * s_pl + s_a * s_a).sqrt(),
    }
}

/// Everything `rung phase` shows for one pulsator over a range of nights.
#[derive(Debug, Clone, PartialEq)]
pub struct PhaseReport {
    /// The star.
    pub star: Star,
    /// Observable windows with their phases.
    pub windows: Vec<PhaseWindow>,
    /// Nights of the range with no window.
    pub dark_nights: Vec<NaiveDate>,
    /// The visit plan.
    pub plan: CoveragePlan,
    /// Day alias and beat period.
    pub alias: Alias,
    /// Phase uncertainty at the start of the range, cycles.
    pub phase_sigma_start: f64,
    /// Phase uncertainty at the end of the range, cycles.
    pub phase_sigma: f64,
    /// Whether the ephemeris is stale by the end of the range.
    pub stale: bool,
    /// Epochs of the visits (exposures sized by the exposure model), when one was given.
    pub epochs: Vec<Epoch>,
    /// Per-point signal-to-noise the exposures were sized for.
    pub snr_per_point: f64,
    /// The distance budget of the planned points, when it can be computed.
    pub budget: Option<DistanceBudget>,
    /// The rule-of-thumb mean-magnitude error σ√((2K+1)/N), mag.
    pub sigma_mean_rule_mag: Option<f64>,
    /// The prediction (precision, hours, verdict), when an exposure model was given.
    pub prediction: Option<Prediction>,
    /// Safety cautions (Sun proximity).
    pub cautions: Vec<String>,
    /// Warnings and explanations.
    pub notes: Vec<String>,
}

/// The pulsating-star method.
#[derive(Debug, Clone, PartialEq)]
pub struct PulsatorMethod {
    /// Coefficients and defaults.
    pub config: PulsatorConfig,
    /// Phase bins of a plan.
    pub bins: usize,
    /// Fourier harmonics.
    pub harmonics: usize,
    /// Per-point SNR of proposals.
    pub snr: f64,
    /// Warn when coverage needs more nights than this.
    pub max_nights: usize,
}

impl Default for PulsatorMethod {
    fn default() -> Self {
        Self::with_config(PulsatorConfig::builtin())
    }
}

/// Context, exposure and epoch for one visit.
fn epoch_at(
    s: &Setting,
    em: &dyn ExposureModel,
    star: &Star,
    t: Instant,
    snr: f64,
) -> Result<(Epoch, Option<String>)> {
    let mag = star.faint_mag().ok_or_else(|| {
        RungError::invalid(
            format!("mean_mag of target '{}'", s.target.name),
            "is missing: exposures and the distance need the star's mean magnitude",
        )
    })?;
    let ctx = Context::exact(s.site, t)?;
    let (exptime_s, n_exposures) = em.exptime(mag, &star.band, snr, &ctx, &star.place)?;
    let got = em.snr(mag, &star.band, exptime_s, &ctx, &star.place)?;
    let p = pointing(s.site, &ctx, &star.place);
    let caution = sun_caution(s.site, &p);
    let visit_s = exptime_s + n_exposures as f64 * em.readout_s() + em.visit_overhead_s();
    Ok((
        Epoch {
            time: t,
            exptime_s,
            n_exposures,
            snr: got,
            airmass: p.airmass.unwrap_or(f64::NAN),
            visit_s,
            exposures: super::BandExposure::single(&star.band, exptime_s, n_exposures, got),
        },
        caution,
    ))
}

impl PulsatorMethod {
    /// The method with its configuration from the layers of
    /// [`PulsatorConfig::load`] (built-in, the user's file, then `extra`).
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        Ok(Self::with_config(PulsatorConfig::load(extra)?))
    }

    /// The method with a given configuration and its defaults.
    pub fn with_config(config: PulsatorConfig) -> Self {
        PulsatorMethod {
            bins: config.defaults.bins,
            harmonics: config.defaults.harmonics,
            snr: config.defaults.propose_snr,
            max_nights: config.defaults.coverage_nights_warn,
            config,
        }
    }

    fn check(&self) -> Result<()> {
        if !(2..=10_000).contains(&self.bins) {
            return Err(RungError::invalid(
                "--bins",
                format!("{} is not within 2..10000", self.bins),
            ));
        }
        if !(1..=10).contains(&self.harmonics) {
            return Err(RungError::invalid(
                "--harmonics",
                format!("{} is not within 1..10", self.harmonics),
            ));
        }
        if !(self.snr.is_finite() && self.snr >= 2.0) {
            return Err(RungError::invalid(
                "--snr",
                format!("{} is not a signal-to-noise of at least 2", self.snr),
            ));
        }
        crate::bounds::SNR.check_as("--snr", self.snr)?;
        Ok(())
    }

    /// The whole phase analysis over the setting's range: windows and their
    /// phases, a plan covering `self.bins` bins, the beat period, the
    /// ephemeris's phase uncertainty and, with an exposure model, the epochs
    /// (per-point SNR `self.snr`) and the distance precision they buy.
    pub fn analyse(&self, s: &Setting, em: Option<&dyn ExposureModel>) -> Result<PhaseReport> {
        self.analyse_with(s, em, self.bins, self.snr)
    }

    fn analyse_with(
        &self,
        s: &Setting,
        em: Option<&dyn ExposureModel>,
        bins: usize,
        snr: f64,
    ) -> Result<PhaseReport> {
        self.check()?;
        let star = Star::from_target(s.target)?;
        let e = star.ephemeris;
        let mut notes = Vec::new();
        // Phase coverage is planned over at most MAX_RANGE_NIGHTS nights: a
        // season's budget over several years uses its first stretch.
        let capped_to = s.from + chrono::Duration::days(MAX_RANGE_NIGHTS - 1);
        let capped;
        let s = if s.to > capped_to {
            notes.push(format!(
                "phase coverage planned over the first {MAX_RANGE_NIGHTS} nights of the range ({} to {capped_to})",
                s.from
            ));
            capped = Setting {
                to: capped_to,
                ..s.clone()
            };
            &capped
        } else {
            s
        };
        let mut cautions = Vec::new();
        let (windows, dark_nights) = phase_windows(s.site, &star, s.from, s.to, &s.limits)?;
        // The dwell a visit needs: its length with the exposure model, at the
        // middle of the first window; else 10 minutes.
        let mut dwell_s = 600.0;
        if let (Some(em), Some(w), Some(mag)) = (em, windows.first(), star.faint_mag()) {
            let mid = w.start.add_seconds(w.end.seconds_since(&w.start) / 2.0);
            let ctx = Context::exact(s.site, mid)?;
            let (x, n) = em.exptime(mag, &star.band, snr, &ctx, &star.place)?;
            dwell_s = x + n as f64 * em.readout_s() + em.visit_overhead_s();
        }
        let bin_len_s = e.period_d * DAY_S / bins as f64;
        if dwell_s > bin_len_s {
            notes.push(format!(
                "a visit ({:.0} s) is longer than a phase bin ({:.0} s): each point smears over more than one bin",
                dwell_s, bin_len_s
            ));
        }
        let plan = plan_coverage(&windows, &e, bins, dwell_s)?;
        let alias = day_alias(e.period_d, self.config.defaults.alias_max_denominator);
        let start_t = windows.first().map(|w| w.bjd_start);
        let end_t = windows.last().map(|w| w.bjd_end);
        let (sig0, sig1) = match (start_t, end_t) {
            (Some(a), Some(b)) => (e.phase_sigma(&a), e.phase_sigma(&b)),
            _ => {
                let noon = crate::astro::night::local_noon(s.site, s.from)?;
                let b = crate::astro::bary::bjd_tdb(s.site, noon, &star.place)?;
                (e.phase_sigma(&b), e.phase_sigma(&b))
            }
        };
        let stale = sig1 > self.config.defaults.stale_phase;
        if stale {
            notes.push(format!(
                "STALE EPHEMERIS: the phase uncertainty reaches {:.3} cycles (±{:.2} d on a maximum) by the end of the range, past {}; re-derive the period before trusting phases",
                sig1,
                sig1 * e.period_d,
                self.config.defaults.stale_phase
            ));
        }
        if e.period_err_d == 0.0 {
            notes.push("period_err_d not given: the phase uncertainty is shown as 0".into());
        }
        match alias.beat_period_d {
            None => notes.push(format!(
                "the period is commensurate with the day (1/P = {}/{} per day): the same phases return every {} night(s) and never drift from this site",
                alias.m, alias.k, alias.k
            )),
            Some(b) if alias.m != 0 && b / alias.k as f64 > self.max_nights as f64 => {
                notes.push(format!(
                    "day alias {}/{}: the beat period is {:.1} d, so one site sweeps the whole cycle only in about {:.0} nights (more than {}); a second site at another longitude would help",
                    alias.m,
                    alias.k,
                    b,
                    b / alias.k as f64,
                    self.max_nights
                ))
            }
            _ => {}
        }
        if plan.bins_covered < bins {
            notes.push(format!(
                "{} of {} phase bins cannot be reached in {} to {} (missing bins {:?}); extend the range",
                bins - plan.bins_covered,
                bins,
                s.from,
                s.to,
                plan.missing_bins
            ));
        }
        if plan.nights_needed() > self.max_nights {
            notes.push(format!(
                "covering the phases needs {} nights, more than {}",
                plan.nights_needed(),
                self.max_nights
            ));
        }
        if windows.is_empty() {
            notes.push(format!(
                "'{}' is not observable from {} between {} and {} under the limits given",
                s.target.name, s.site.name, s.from, s.to
            ));
        }
        let law = self.config.law(&star.band);
        let mut epochs = Vec::new();
        let mut budget = None;
        let mut rule = None;
        let mut prediction = None;
        if let (Some(em), Ok(_)) = (em, &law) {
            if star.mean_mag.is_some() {
                for v in &plan.visits {
                    let (ep, c) = epoch_at(s, em, &star, v.time, snr)?;
                    if let Some(c) = c {
                        cautions.push(format!("{}: {c}", v.time.iso()));
                    }
                    epochs.push(ep);
                }
                let p = self.predict_star(s, &star, &epochs, &mut notes)?;
                budget = p.1;
                rule = p.2;
                let mut pred = p.0;
                if windows.is_empty() {
                    pred.verdict = Verdict::NotObservable {
                        when: Some(format!(
                            "not between {} and {} under these limits",
                            s.from, s.to
                        )),
                    };
                }
                prediction = Some(pred);
            } else {
                notes.push("mean_mag not given: no exposures or distance precision".into());
            }
        } else if let (Some(m), Ok(law)) = (star.mean_mag, &law) {
            // No exposure model: the budget at the floor, to show what the relation allows.
            let b = distance_budget(
                m,
                e.period_d,
                star.extinction_mag,
                0.0,
                law,
                self.config.defaults.extinction_sigma_frac,
            );
            notes.push(format!(
                "no exposure model: distance precision not computed; the relation alone limits it to {:.1} %",
                b.floor_pct
            ));
        }
        if let Err(e) = law {
            notes.push(format!("{e}: no distance"));
        }
        Ok(PhaseReport {
            star,
            windows,
            dark_nights,
            plan,
            alias,
            phase_sigma_start: sig0,
            phase_sigma: sig1,
            stale,
            epochs,
            snr_per_point: snr,
            budget,
            sigma_mean_rule_mag: rule,
            prediction,
            cautions,
            notes,
        })
    }

    /// Prediction for a star's epochs, with its budget and the rule-of-thumb σ_m̄.
    fn predict_star(
        &self,
        s: &Setting,
        star: &Star,
        epochs: &[Epoch],
        notes: &mut Vec<String>,
    ) -> Result<(Prediction, Option<DistanceBudget>, Option<f64>)> {
        let law = self.config.law(&star.band)?;
        let mean = star.mean_mag.ok_or_else(|| {
            RungError::invalid(
                format!("mean_mag of target '{}'", s.target.name),
                "is missing: the distance needs the star's mean magnitude",
            )
        })?;
        let mut phases = Vec::with_capacity(epochs.len());
        let mut sigmas = Vec::with_capacity(epochs.len());
        for ep in epochs {
            if !(ep.snr.is_finite() && ep.snr > 0.0) {
                return Err(RungError::invalid(
                    "epoch",
                    format!(
                        "signal-to-noise {} at {} is not positive",
                        ep.snr,
                        ep.time.iso()
                    ),
                ));
            }
            let b = crate::astro::bary::bjd_tdb(s.site, ep.time, &star.place)?;
            phases.push(star.ephemeris.phase(&b));
            sigmas.push(sigma_mag_from_snr(ep.snr));
        }
        let hours_needed = epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0;
        let k = self.harmonics;
        let floor = distance_budget(
            mean,
            star.ephemeris.period_d,
            star.extinction_mag,
            0.0,
            law,
            self.config.defaults.extinction_sigma_frac,
        )
        .floor_pct;
        let (pct, budget, rule) = match mean_mag_sigma(&phases, &sigmas, k) {
            Ok(sm) => {
                let b = distance_budget(
                    mean,
                    star.ephemeris.period_d,
                    star.extinction_mag,
                    sm,
                    law,
                    self.config.defaults.extinction_sigma_frac,
                );
                let rms = (sigmas.iter().map(|x| x * x).sum::<f64>() / sigmas.len() as f64).sqrt();
                let r = mean_mag_sigma_rule(rms, sigmas.len(), k);
                (b.distance_precision_pct, Some(b), Some(r))
            }
            Err(e) => {
                notes.push(format!("{e}: no distance precision from these epochs"));
                (f64::INFINITY, None, None)
            }
        };
        let verdict = match s.target.goal_pct {
            _ if !pct.is_finite() => Verdict::NeedsMoreSeasons { seasons: None },
            Some(g) if pct <= g => Verdict::Reachable,
            Some(g) if floor >= g => Verdict::LimitedByFloor { floor_pct: floor },
            Some(_) => Verdict::NeedsMoreSeasons { seasons: None },
            None => Verdict::Reachable,
        };
        Ok((
            Prediction {
                kind: Kind::Pulsator,
                epochs: epochs.to_vec(),
                distance_precision_pct: pct,
                hours_needed,
                verdict,
                notes: notes.clone(),
                error_terms: budget.as_ref().map(|b| b.error_terms()).unwrap_or_default(),
            },
            budget,
            rule,
        ))
    }

    /// Goal mode with the full report: the points, the per-point SNR and the
    /// plan that reach `goal_pct`, or the floor set by the relation's scatter.
    ///
    /// Rule: σ_m̄ allowed = √(σ_μ,goal² − σ_PL² − σ_A²) with σ_μ,goal =
    /// goal/(100 · ln10/5). With N points well spread in phase σ_m̄ ≈ σ/√N
    /// (the fit covariance), so N starts at max(bins, 2K + 1) and the per-point
    /// SNR is 1.0857 √N / σ_m̄ allowed, kept within [snr_min, snr_max]; when
    /// snr_max is not enough N grows. The plan then covers N bins (one point
    /// per bin) and the prediction from the actual phases decides; the SNR is
    /// raised up to twice if uneven phases fall short.
    pub fn goal_report(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
    ) -> Result<PhaseReport> {
        if !(goal_pct.is_finite() && goal_pct > 0.0 && goal_pct <= 100.0) {
            return Err(RungError::invalid(
                "goal",
                format!("{goal_pct} is not a percentage in (0, 100]"),
            ));
        }
        self.check()?;
        let star = Star::from_target(s.target)?;
        let law = self.config.law(&star.band)?;
        let mean = star.mean_mag.ok_or_else(|| {
            RungError::invalid(
                format!("mean_mag of target '{}'", s.target.name),
                "is missing: the distance needs the star's mean magnitude",
            )
        })?;
        let d = &self.config.defaults;
        let b0 = distance_budget(
            mean,
            star.ephemeris.period_d,
            star.extinction_mag,
            0.0,
            law,
            d.extinction_sigma_frac,
        );
        let mut goal_t = s.target.clone();
        goal_t.goal_pct = Some(goal_pct);
        let s2 = Setting {
            target: &goal_t,
            ..s.clone()
        };
        if goal_pct <= b0.floor_pct * (1.0 + 1e-9) {
            let mut r = self.analyse_with(&s2, Some(em), self.bins, self.snr)?;
            r.notes.push(format!(
                "goal {goal_pct} % is out of reach for this method: the relation's scatter ({:.3} mag) and the extinction error ({:.3} mag) set a floor of {:.2} % whatever the points",
                b0.sigma_pl_mag, b0.sigma_ext_mag, b0.floor_pct
            ));
            if let Some(p) = &mut r.prediction {
                p.verdict = Verdict::LimitedByFloor {
                    floor_pct: b0.floor_pct,
                };
                p.notes = r.notes.clone();
            }
            return Ok(r);
        }
        let s_mu = goal_pct / 100.0 / DIST_FRAC_PER_MAG;
        let allowed = (s_mu * s_mu - b0.sigma_pl_mag.powi(2) - b0.sigma_ext_mag.powi(2)).sqrt();
        let mut n = self.bins.max(2 * self.harmonics + 1);
        let mut snr = MAG_PER_INV_SNR / (allowed * (n as f64).sqrt());
        if snr > d.snr_max {
            let need = (MAG_PER_INV_SNR / d.snr_max / allowed).powi(2).ceil() as usize;
            n = n.max(need);
            snr = d.snr_max;
        }
        snr = snr.max(d.snr_min);
        if n > 2000 {
            return Err(RungError::invalid(
                "goal",
                format!("{goal_pct} % would need {n} points; choose a looser goal"),
            ));
        }
        let mut r = self.analyse_with(&s2, Some(em), n, snr)?;
        for _ in 0..2 {
            let Some(p) = &r.prediction else { break };
            if p.distance_precision_pct <= goal_pct || !p.distance_precision_pct.is_finite() {
                break;
            }
            let Some(b) = &r.budget else { break };
            let ratio = b.sigma_mean_mag / allowed;
            let next = (snr * ratio * 1.05).min(d.snr_max);
            if next <= snr * 1.001 {
                break;
            }
            snr = next;
            r = self.analyse_with(&s2, Some(em), n, snr)?;
        }
        r.notes.push(format!(
            "goal {goal_pct} %: {n} points in {n} phase bins at SNR {snr:.0} each (σ ≈ {:.4} mag per point)",
            sigma_mag_from_snr(snr)
        ));
        if r.plan.bins_covered < n
            && let Some(p) = &mut r.prediction
            && p.verdict == Verdict::Reachable
            && p.distance_precision_pct > goal_pct
        {
            p.verdict = Verdict::NeedsMoreSeasons { seasons: None };
        }
        if let Some(p) = &mut r.prediction {
            p.notes = r.notes.clone();
        }
        Ok(r)
    }
}

impl Method for PulsatorMethod {
    fn kind(&self) -> Kind {
        Kind::Pulsator
    }

    fn config_json(&self) -> serde_json::Value {
        serde_json::json!({
            "config": self.config,
            "bins": self.bins,
            "harmonics": self.harmonics,
            "snr": self.snr,
            "max_nights": self.max_nights,
        })
    }

    fn as_any(&self) -> &dyn std::any::Any {
        self
    }

    /// One visit per phase bin (`bins`, default 10) on the fewest nights of
    /// the range, exposures sized for the per-point SNR `snr` at the faint phase.
    fn propose(&self, s: &Setting, em: &dyn ExposureModel) -> Result<Vec<Epoch>> {
        Ok(self.analyse(s, Some(em))?.epochs)
    }

    /// σ_d/d from the epochs' phases (BJD_TDB) and SNRs through the Fourier-fit
    /// covariance and the Leavitt law; hours with overheads from the epochs.
    fn predict(&self, s: &Setting, em: &dyn ExposureModel, epochs: &[Epoch]) -> Result<Prediction> {
        let _ = em;
        let star = Star::from_target(s.target)?;
        let mut notes = Vec::new();
        Ok(self.predict_star(s, &star, epochs, &mut notes)?.0)
    }

    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        let r = self.goal_report(s, em, goal_pct)?;
        r.prediction.ok_or_else(|| {
            RungError::invalid(
                format!("target '{}'", s.target.name),
                "no prediction could be made (no mean magnitude or no Leavitt law for its band)",
            )
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_config_parses() {
        let c = PulsatorConfig::builtin();
        assert_eq!(c.defaults.bins, 10);
        assert!(c.band.contains_key("V"));
        assert!(c.law("B").is_err());
    }

    #[test]
    fn bad_config_names_its_field() {
        let bad = BUILTIN_CONFIG.replace("bins = 10", "bins = 1");
        let e = PulsatorConfig::parse(&bad, Path::new("x.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("x.toml") && e.contains("defaults.bins"), "{e}");
    }

    #[test]
    fn user_config_merges_over_builtin() {
        let c = PulsatorConfig::merged(
            "[defaults]\nbins = 12\n[band.B]\na = -2.3\na_err = 0.1\nb = -3.4\nb_err = 0.05\nscatter_mag = 0.25\nsource = \"test only\"\n",
            Path::new("user.toml"),
        )
        .unwrap();
        assert_eq!(c.defaults.bins, 12);
        assert_eq!(c.defaults.harmonics, 3);
        assert!(c.law("B").is_ok() && c.law("V").is_ok());
        let e = PulsatorConfig::merged("[defaults]\nbins = \"x\"\n", Path::new("user.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("user.toml") && e.contains("bins"), "{e}");
    }
}
