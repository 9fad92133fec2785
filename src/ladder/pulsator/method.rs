//! The method's face: the phase analysis of `rung phase`, proposals,
//! predictions and goal plans.

use super::*;
use crate::astro::frames::Context;
use crate::astro::time::{DAY_S, Instant};
use crate::astro::{pointing, sun_caution};
use crate::error::{Result, RungError};
use crate::io::targets::Kind;
use crate::ladder::{Epoch, ExposureModel, Method, Prediction, Setting, Verdict};
use chrono::NaiveDate;
use std::path::Path;

/// The shortest period a proposed period search reaches, as a fraction of
/// the catalogued period: P ± 3σ_P, its short end held at P/3 once σ_P
/// passes 2P/9 (the two are equal there). An uncertainty that large leaves
/// the short side unconstrained, and a search down to the shortest period
/// rung takes (0.01 d) costs as 1/P: about 20 s for a 5-day star with σ_P
/// 2 d. A third keeps the first two harmonics, P/2 and P/3, the usual
/// confusions of a period analysis (common practice); the fraction itself
/// is this project's own choice (docs/science.md, Pulsators).
pub const SHORTEST_SEARCH_FRACTION: f64 = 1.0 / 3.0;

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
    /// A period-discovery cadence over the range: proposed when the
    /// ephemeris is stale from the start (its period searched within
    /// P ± 3σ_P), or for the period range asked ([`PulsatorMethod::discover_range`]).
    pub discovery: Option<DiscoveryPlan>,
    /// Epochs of the visits (exposures sized by the exposure model), when one was given.
    pub epochs: Vec<Epoch>,
    /// Per-point signal-to-noise the exposures were sized for.
    pub snr_per_point: f64,
    /// The relation the star's distance uses (class, metallicity), when one applies.
    pub relation: Option<StarRelation>,
    /// The distance budget of the planned points, when it can be computed.
    pub budget: Option<DistanceBudget>,
    /// The rule-of-thumb mean-magnitude error σ√((2K+1)/N), mag.
    pub sigma_mean_rule_mag: Option<f64>,
    /// How the mean magnitude comes from the planned points (Fourier fit or
    /// template), when it can be computed.
    pub mean: Option<MeanEstimate>,
    /// The prediction (precision, hours, verdict), when an exposure model was given.
    pub prediction: Option<Prediction>,
    /// Safety cautions (Sun proximity).
    pub cautions: Vec<String>,
    /// Warnings and explanations.
    pub notes: Vec<String>,
}

/// A star's prediction with its budget, the rule-of-thumb σ_m̄ and how its
/// mean magnitude was estimated.
type StarPrediction = (
    Prediction,
    Option<DistanceBudget>,
    Option<f64>,
    Option<MeanEstimate>,
);

/// What each epoch gives a pulsator's prediction, in the epochs' order: its
/// phase (BJD_TDB), its magnitude error, and the largest phase error of the
/// ephemeris over them. An epoch's terms depend on that epoch alone, so the
/// scheduler's fill works out the base's once and adds each extra epoch's.
/// The fit's normal matrix is summed epoch by epoch as they are added, in
/// the same order as a fit of all of them sums it ([`NormalSums`]).
#[derive(Clone)]
struct EpochTerms {
    phases: Vec<f64>,
    sigmas: Vec<f64>,
    phase_sigma_max: f64,
    sums: NormalSums,
}

impl EpochTerms {
    /// Room for `n` epochs of a `k`-harmonic fit.
    fn with_capacity(n: usize, k: usize) -> Self {
        EpochTerms {
            phases: Vec::with_capacity(n),
            sigmas: Vec::with_capacity(n),
            phase_sigma_max: 0.0,
            sums: NormalSums::new(k),
        }
    }

    /// The terms of `epochs` after those held; the first epoch refused.
    fn add(&mut self, s: &Setting, star: &Star, epochs: &[Epoch]) -> Result<()> {
        self.add_at(s, star, epochs, false)
    }

    /// [`Self::add`]; with `at_night` each epoch's BJD_TDB from its night's
    /// interpolated context ([`crate::astro::night::Night::context_without_moon`],
    /// as the phase windows' are) instead of the exact one: the fill's
    /// ranking of a candidate visit.
    fn add_at(&mut self, s: &Setting, star: &Star, epochs: &[Epoch], at_night: bool) -> Result<()> {
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
            let b = if at_night {
                use crate::astro::night::{Night, night_of};
                let night = Night::shared(s.site, night_of(s.site, ep.time))?;
                crate::astro::bary::bjd_tdb_ctx(
                    s.site,
                    &night.context_without_moon(ep.time),
                    &star.place,
                )
            } else {
                crate::astro::bary::bjd_tdb(s.site, ep.time, &star.place)?
            };
            let (phase, sigma) = (star.ephemeris.phase(&b), sigma_mag_from_snr(ep.snr));
            self.phases.push(phase);
            self.phase_sigma_max = self.phase_sigma_max.max(star.ephemeris.phase_sigma(&b));
            self.sigmas.push(sigma);
            self.sums.add(phase, sigma);
        }
        Ok(())
    }
}

/// What a star's prediction takes from its light curve alone, whatever the
/// epochs: the gradient of the intensity mean of the K-harmonic sinusoid
/// about the mean magnitude ([`model_gradient`]) and the intensity mean
/// minus the magnitude mean of its amplitude's sinusoid. Each is a sum over
/// 720 phases, the most of a prediction's arithmetic, so the fill's many
/// predictions of one star share them.
struct CurveTerms {
    gradient: Vec<f64>,
    offset: f64,
}

impl CurveTerms {
    fn new(star: &Star, mean: f64, k: usize) -> Self {
        CurveTerms {
            gradient: model_gradient(&sinusoid_model(mean, star.amplitude_mag, k), k),
            offset: intensity_mean_of(&sinusoid_model(0.0, star.amplitude_mag, 1)),
        }
    }
}

/// The star's mean magnitude, which its distance needs.
fn star_mean_mag(s: &Setting, star: &Star) -> Result<f64> {
    star.mean_mag.ok_or_else(|| {
        RungError::invalid(
            format!("mean_mag of target '{}'", s.target.name),
            "is missing: the distance needs the star's mean magnitude",
        )
    })
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
    /// A period range (days) to plan a discovery cadence for, whatever the
    /// ephemeris (`rung phase --period-range`); `None`: only when stale.
    pub discover_range: Option<(f64, f64)>,
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
            exposures: crate::ladder::BandExposure::single(&star.band, exptime_s, n_exposures, got),
        },
        caution,
    ))
}

/// An error about a star's relation, with the target's name in its subject.
fn name_target(e: RungError, s: &Setting) -> RungError {
    match e {
        RungError::Invalid { what, why } => RungError::Invalid {
            what: format!("{what} of target '{}'", s.target.name),
            why,
        },
        other => other,
    }
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
            discover_range: None,
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

    /// A cadence of `defaults.discovery_epochs` observations over the
    /// setting's range that recovers a period between `period_min_d` and
    /// `period_max_d` ([`plan_discovery`]): per-point error from the method's
    /// SNR, the star's semi-amplitude (else half of
    /// `defaults.discovery_amplitude_mag`, said so), the visit's length from
    /// the exposure model at the faint phase (else 10 minutes).
    pub fn discover(
        &self,
        s: &Setting,
        em: Option<&dyn ExposureModel>,
        star: &Star,
        period_min_d: f64,
        period_max_d: f64,
    ) -> Result<DiscoveryPlan> {
        let mut dwell_s = 600.0;
        let first = observable_intervals(s.site, &star.place, s.from, s.to, &s.limits)?
            .first()
            .copied();
        if let (Some(em), Some(mag), Some((a, b))) = (em, star.faint_mag(), first) {
            let ctx = Context::exact(s.site, a.add_seconds(b.seconds_since(&a) / 2.0))?;
            let (x, n) = em.exptime(mag, &star.band, self.snr, &ctx, &star.place)?;
            dwell_s = x + n as f64 * em.readout_s() + em.visit_overhead_s();
        }
        let d = &self.config.defaults;
        let (amp, assumed) = if star.amplitude_mag > 0.0 {
            (star.amplitude_mag, false)
        } else {
            (d.discovery_amplitude_mag, true)
        };
        let mut plan = plan_discovery(&DiscoveryInput {
            site: s.site,
            place: &star.place,
            from: s.from,
            to: s.to,
            limits: &s.limits,
            period_min_d,
            period_max_d,
            epochs: d.discovery_epochs,
            sigma_point_mag: sigma_mag_from_snr(self.snr),
            semi_amplitude_mag: amp / 2.0,
            dwell_s,
        })?;
        if assumed {
            plan.notes.insert(
                0,
                format!("amplitude_mag not given: a peak-to-peak amplitude of {amp} mag assumed"),
            );
        }
        Ok(plan)
    }

    /// The report with its period-discovery cadence: for the range asked
    /// ([`Self::discover_range`]), else when the ephemeris is stale from the
    /// start of the range (P ± 3σ_P). Kept out of the goal search and the
    /// proposals, which do not show it.
    fn add_discovery(
        &self,
        s: &Setting,
        em: Option<&dyn ExposureModel>,
        mut r: PhaseReport,
    ) -> PhaseReport {
        let e = r.star.ephemeris;
        // Over the same stretch of nights as the phase coverage.
        let capped_to = s.from + chrono::Duration::days(MAX_RANGE_NIGHTS - 1);
        let capped = Setting {
            to: s.to.min(capped_to),
            ..s.clone()
        };
        let s = &capped;
        let range = self.discover_range.or_else(|| {
            (r.phase_sigma_start > self.config.defaults.stale_phase && e.period_err_d > 0.0).then(
                || {
                    // P ± 3σ_P, its short end held at P/3
                    // (SHORTEST_SEARCH_FRACTION) once σ_P passes 2P/9.
                    let lo = (e.period_d - 3.0 * e.period_err_d)
                        .max(e.period_d * SHORTEST_SEARCH_FRACTION)
                        .max(crate::bounds::PERIOD_D.min);
                    (lo, e.period_d + 3.0 * e.period_err_d)
                },
            )
        });
        r.discovery = match range {
            Some((lo, hi)) => match self.discover(s, em, &r.star, lo, hi) {
                Ok(d) => {
                    if self.discover_range.is_none() {
                        let held = if lo > e.period_d - 3.0 * e.period_err_d {
                            ", its short end held at P/3"
                        } else {
                            ""
                        };
                        r.notes.push(format!(
                                "the ephemeris is stale from the start (σφ {:.3}): a period search over {lo:.5}–{hi:.5} d (P ± 3σ_P{held}) in {} observations is proposed",
                                r.phase_sigma_start,
                                d.bjd_tdb.len()
                            ));
                    }
                    Some(d)
                }
                Err(err) => {
                    r.notes.push(format!("no period-search cadence: {err}"));
                    None
                }
            },
            None => None,
        };
        r
    }

    /// The whole phase analysis over the setting's range: windows and their
    /// phases, a plan covering `self.bins` bins, the beat period, the
    /// ephemeris's phase uncertainty and, with an exposure model, the epochs
    /// (per-point SNR `self.snr`) and the distance precision they buy.
    pub fn analyse(&self, s: &Setting, em: Option<&dyn ExposureModel>) -> Result<PhaseReport> {
        let r = self.analyse_with(s, em, self.bins, self.snr, &mut KnownWindows::default())?;
        Ok(self.add_discovery(s, em, r))
    }

    fn analyse_with(
        &self,
        s: &Setting,
        em: Option<&dyn ExposureModel>,
        bins: usize,
        snr: f64,
        known: &mut KnownWindows,
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
        let (windows, dark_nights) = known.of(s, &star)?;
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
        if let Some(u) = &star.ephemeris_update {
            notes.push(format!(
                "ephemeris refitted to {} observed maxima: P = {:.6} ± {:.6} d (was {} ± {} d), epoch BJD_TDB {:.4} ± {:.4} d",
                u.points.len(),
                u.new.period_d,
                u.new.period_err_d,
                u.old.period_d,
                u.old.period_err_d,
                u.new.epoch_max_bjd,
                u.new.epoch_err_d
            ));
            notes.extend(u.notes.iter().cloned());
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
        let law = star.relation(&self.config).map_err(|e| name_target(e, s));
        if let Ok(r) = &law {
            notes.extend(r.notes.iter().cloned());
            if r.relation.reddening_free() && star.extinction_mag > 0.0 {
                notes.push(format!(
                    "{} is reddening-free: extinction_mag {} is not applied",
                    r.relation.band, star.extinction_mag
                ));
            }
        }
        let mut epochs = Vec::new();
        let mut budget = None;
        let mut rule = None;
        let mut mean_est = None;
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
                mean_est = p.3;
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
                self.config.calibration_floor(&law.relation),
            );
            notes.push(format!(
                "no exposure model: distance precision not computed; the relation alone limits it to {:.1} %",
                b.floor_pct
            ));
        }
        let relation = match law {
            Ok(r) => Some(r),
            Err(e) => {
                notes.push(format!("{e}: no distance"));
                None
            }
        };
        Ok(PhaseReport {
            star,
            windows,
            dark_nights,
            plan,
            alias,
            phase_sigma_start: sig0,
            phase_sigma: sig1,
            stale,
            discovery: None,
            epochs,
            snr_per_point: snr,
            budget,
            sigma_mean_rule_mag: rule,
            mean: mean_est,
            prediction,
            relation,
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
    ) -> Result<StarPrediction> {
        let law = &star.relation(&self.config).map_err(|e| name_target(e, s))?;
        let mean = star_mean_mag(s, star)?;
        let mut terms = EpochTerms::with_capacity(epochs.len(), self.harmonics);
        terms.add(s, star, epochs)?;
        let curve = CurveTerms::new(star, mean, self.harmonics);
        self.predict_star_from(s, star, law, mean, epochs, terms, &curve, notes)
    }

    /// [`Self::predict_star`] with the star's relation and mean magnitude
    /// and its epochs' terms ([`EpochTerms`]) and light curve's
    /// ([`CurveTerms`], of `mean`) in hand.
    #[allow(clippy::too_many_arguments)]
    fn predict_star_from(
        &self,
        s: &Setting,
        star: &Star,
        law: &StarRelation,
        mean: f64,
        epochs: &[Epoch],
        terms: EpochTerms,
        curve: &CurveTerms,
        notes: &mut Vec<String>,
    ) -> Result<StarPrediction> {
        let cal = self.config.calibration_floor(&law.relation);
        let EpochTerms {
            phases,
            sigmas,
            phase_sigma_max,
            sums,
        } = terms;
        let hours_needed = epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0;
        let k = self.harmonics;
        let floor = distance_budget(
            mean,
            star.ephemeris.period_d,
            star.extinction_mag,
            0.0,
            law,
            self.config.defaults.extinction_sigma_frac,
            cal,
        )
        .floor_pct;
        // The mean magnitude: the intensity mean of a K-harmonic fit, or
        // the points through the class's template in this band (while the
        // ephemeris gives the phases), whichever is the more precise.
        // intensity_mean_sigma of the K-harmonic sinusoid, from the sums.
        let fourier = sums
            .covariance(&phases, &sigmas)
            .map(|cov| intensity_mean_sigma_of(&cov, &curve.gradient));
        let template = self
            .config
            .template_for(law.relation.class, &law.relation.band)
            .cloned();
        let template_sigma = match &template {
            Some(t) if phase_sigma_max <= self.config.defaults.stale_phase => {
                template_mean_sigma(&sigmas, t.epoch_sigma_mag).ok()
            }
            Some(_) => {
                notes.push(format!(
                    "the {} template is not used: the ephemeris's phase error reaches {:.3} cycle at the visits (a template needs the phase)",
                    law.relation.band, phase_sigma_max
                ));
                None
            }
            None => None,
        };
        let offset = curve.offset;
        let est = match (&fourier, template_sigma) {
            (Ok(f), Some(t)) if t < *f => Some(("template", t)),
            (Ok(f), _) => Some(("fourier", *f)),
            (Err(_), Some(t)) => Some(("template", t)),
            (Err(_), None) => None,
        };
        let mean_est = est.map(|(from, sm)| MeanEstimate {
            sigma_mag: sm,
            from: from.to_string(),
            fourier_sigma_mag: fourier.as_ref().ok().copied(),
            template_sigma_mag: template_sigma,
            template_epoch_sigma_mag: template.as_ref().map(|t| t.epoch_sigma_mag),
            template_source: template.as_ref().map(|t| t.source.clone()),
            intensity_minus_magnitude_mag: offset,
        });
        let (pct, budget, rule) = match (&mean_est, fourier) {
            (Some(m), _) => {
                let b = distance_budget(
                    mean,
                    star.ephemeris.period_d,
                    star.extinction_mag,
                    m.sigma_mag,
                    law,
                    self.config.defaults.extinction_sigma_frac,
                    cal,
                );
                let rms = (sigmas.iter().map(|x| x * x).sum::<f64>() / sigmas.len() as f64).sqrt();
                let r = mean_mag_sigma_rule(rms, sigmas.len(), k);
                (b.distance_precision_pct, Some(b), Some(r))
            }
            (None, Err(e)) => {
                notes.push(format!("{e}: no distance precision from these epochs"));
                (f64::INFINITY, None, None)
            }
            (None, Ok(_)) => (f64::INFINITY, None, None),
        };
        let verdict = match s.target.goal_pct {
            _ if !pct.is_finite() => Verdict::NeedsMoreSeasons { seasons: None },
            Some(g) if pct <= g => Verdict::Reachable,
            Some(g) if floor >= g => Verdict::LimitedByFloor { floor_pct: floor },
            Some(_) => Verdict::NeedsMoreSeasons { seasons: None },
            None => Verdict::Reachable,
        };
        // Phases the ephemeris cannot predict: the precision above assumes
        // them, so no distance is promised until the ephemeris is refreshed.
        let stale_at = self.config.defaults.stale_phase;
        let verdict = if verdict == Verdict::Reachable && phase_sigma_max > stale_at {
            notes.push(format!(
                "the ephemeris is stale at the visits (phase ± {phase_sigma_max:.3} cycle, past {stale_at}): refresh it before trusting this precision: time a few maxima and refit (rung phase --maxima BJD[:ERR] ..., or the target's maxima_bjd; the refit is the report's ephemeris_update)"
            ));
            Verdict::StaleEphemeris {
                phase_sigma: phase_sigma_max,
            }
        } else {
            verdict
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
            mean_est,
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
        let r = self.goal_plan_report(s, em, goal_pct, &mut KnownWindows::default())?;
        Ok(self.add_discovery(s, Some(em), r))
    }

    /// [`Self::goal_report`] without the discovery cadence.
    /// Its phase windows come from `known` (worked out there once for the
    /// goals of one target: they do not depend on the goal).
    fn goal_plan_report(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
        known: &mut KnownWindows,
    ) -> Result<PhaseReport> {
        if !(goal_pct.is_finite() && goal_pct > 0.0 && goal_pct <= 100.0) {
            return Err(RungError::invalid(
                "goal",
                format!("{goal_pct} is not a percentage in (0, 100]"),
            ));
        }
        self.check()?;
        let star = Star::from_target(s.target)?;
        // No relation for this star (period outside every range, no class,
        // no relation in its band): the phases and the plan still stand, the
        // refusal is said and no distance is given.
        let law = match star.relation(&self.config) {
            Ok(r) => r,
            Err(_) => return self.analyse_with(s, Some(em), self.bins, self.snr, known),
        };
        let law = &law;
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
            self.config.calibration_floor(&law.relation),
        );
        let mut goal_t = s.target.clone();
        goal_t.goal_pct = Some(goal_pct);
        let s2 = Setting {
            target: &goal_t,
            ..s.clone()
        };
        if goal_pct <= b0.floor_pct * (1.0 + 1e-9) {
            let mut r = self.analyse_with(&s2, Some(em), self.bins, self.snr, known)?;
            r.notes.push(format!(
                "goal {goal_pct} % is out of reach for this method: the relation's scatter ({:.3} mag) and calibration ({:.3} mag), the metallicity term ({:.3} mag), the extinction error ({:.3} mag) and the photometric calibration floor ({:.3} mag) set a floor of {:.2} % whatever the points",
                b0.sigma_scatter_mag,
                b0.sigma_zero_point_mag,
                b0.sigma_feh_mag,
                b0.sigma_ext_mag,
                b0.sigma_cal_mag,
                b0.floor_pct
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
        let floor_mag = b0.floor_pct / 100.0 / DIST_FRAC_PER_MAG;
        let allowed = (s_mu * s_mu - floor_mag * floor_mag).sqrt();
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
        // Where the class has a template in this band (published practice in
        // the near-infrared), fewer epochs may do: each at the SNR whose
        // error is half the template's (deeper buys little), as many as
        // (σ² + σ_t²)/σ_m̄,allowed² ask. Taken when it reaches the goal
        // with fewer points than the Fourier plan.
        if let Some(t) = self
            .config
            .template_for(law.relation.class, &law.relation.band)
        {
            let st = t.epoch_sigma_mag;
            let snr_t = (MAG_PER_INV_SNR / (st / 2.0)).clamp(d.snr_min, d.snr_max);
            let sp = MAG_PER_INV_SNR / snr_t;
            let n_t = ((sp * sp + st * st) / (allowed * allowed)).ceil().max(1.0);
            if n_t < n as f64 {
                let n_t = n_t as usize;
                let mut r = self.analyse_with(&s2, Some(em), n_t, snr_t, known)?;
                let by_template = r.mean.as_ref().is_some_and(|m| m.from == "template");
                let reaches = r
                    .prediction
                    .as_ref()
                    .is_some_and(|p| p.distance_precision_pct <= goal_pct);
                if by_template && reaches {
                    r.notes.push(format!(
                        "goal {goal_pct} %: {n_t} epoch(s) through the {} template at SNR {snr_t:.0} each (σ ≈ {sp:.4} mag per point, template {st} mag per epoch; {}) instead of {n} points for a Fourier fit",
                        law.relation.band, t.source
                    ));
                    if let Some(p) = &mut r.prediction {
                        p.notes = r.notes.clone();
                    }
                    return Ok(r);
                }
            }
        }
        let mut r = self.analyse_with(&s2, Some(em), n, snr, known)?;
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
            r = self.analyse_with(&s2, Some(em), n, snr, known)?;
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

/// What [`Method::predict`] works out of a base that an extra epoch does
/// not change: the star, its relation, its mean magnitude, the base's
/// terms and the light curve's.
struct SharedBase {
    star: Star,
    law: StarRelation,
    mean: f64,
    terms: EpochTerms,
    curve: CurveTerms,
}

impl PulsatorMethod {
    /// [`SharedBase`] of `base`; an error where `predict` would refuse
    /// before its fit (the caller then asks `predict`, which words it).
    fn shared_base(&self, s: &Setting, base: &[Epoch]) -> Result<SharedBase> {
        let star = Star::from_target(s.target)?;
        let law = star.relation(&self.config)?;
        let mean = star_mean_mag(s, &star)?;
        let mut terms = EpochTerms::with_capacity(base.len() + 1, self.harmonics);
        terms.add(s, &star, base)?;
        let curve = CurveTerms::new(&star, mean, self.harmonics);
        Ok(SharedBase {
            star,
            law,
            mean,
            terms,
            curve,
        })
    }

    /// `predict` of `base` then each of `extra`, from `sh` (of `base`);
    /// with `at_night` each extra's phase from its night's interpolated
    /// context ([`EpochTerms::add_at`]).
    fn each_extra(
        &self,
        s: &Setting,
        sh: &SharedBase,
        base: &[Epoch],
        extra: &[Epoch],
        at_night: bool,
    ) -> Vec<Result<Prediction>> {
        crate::ladder::with_each_extra(base, extra, |e, all| {
            let mut t = sh.terms.clone();
            t.add_at(s, &sh.star, std::slice::from_ref(e), at_night)?;
            let mut notes = Vec::new();
            Ok(self
                .predict_star_from(s, &sh.star, &sh.law, sh.mean, all, t, &sh.curve, &mut notes)?
                .0)
        })
    }

    /// [`Method::predict`] of `base` and each extra from one `SharedBase`
    /// (`at_night`: [`Self::each_extra`]'s).
    fn then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
        at_night: bool,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        let Ok(sh) = self.shared_base(s, base) else {
            return crate::ladder::predict_then_each_by_one(self, s, em, base, extra_for);
        };
        let mut notes = Vec::new();
        let p0 = self
            .predict_star_from(
                s,
                &sh.star,
                &sh.law,
                sh.mean,
                base,
                sh.terms.clone(),
                &sh.curve,
                &mut notes,
            )
            .map(|r| r.0);
        crate::ladder::then_each(p0, extra_for, |extra| {
            self.each_extra(s, &sh, base, extra, at_night)
        })
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
        Ok(self
            .analyse_with(
                s,
                Some(em),
                self.bins,
                self.snr,
                &mut KnownWindows::default(),
            )?
            .epochs)
    }

    /// σ_d/d from the epochs' phases (BJD_TDB) and SNRs through the Fourier-fit
    /// covariance and the Leavitt law; hours with overheads from the epochs.
    fn predict(&self, s: &Setting, em: &dyn ExposureModel, epochs: &[Epoch]) -> Result<Prediction> {
        let _ = em;
        let star = Star::from_target(s.target)?;
        let mut notes = Vec::new();
        Ok(self.predict_star(s, &star, epochs, &mut notes)?.0)
    }

    /// [`Method::predict`] of `base` then each extra epoch: the star, its
    /// relation and the base epochs' terms (their BJD_TDB phases, the most
    /// of the work) once, each extra epoch's terms on their own, then the
    /// same fit, so every answer is `predict`'s bit for bit. When the base
    /// itself is refused, each extra is asked of `predict` (which words the
    /// refusal).
    fn predict_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra: &[Epoch],
    ) -> Vec<Result<Prediction>> {
        let Ok(sh) = self.shared_base(s, base) else {
            return crate::ladder::predict_each_by_one(self, s, em, base, extra);
        };
        self.each_extra(s, &sh, base, extra, false)
    }

    /// [`Method::predict`] of `base` and each extra from one `SharedBase`.
    fn predict_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        self.then_each_extra(s, em, base, extra_for, false)
    }

    /// [`Method::predict_then_each_extra`] with each extra's phase from its
    /// night's interpolated context.
    fn rank_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        self.then_each_extra(s, em, base, extra_for, true)
    }

    /// A done visit gives the wanted epoch in its phase bin (BJD_TDB phases,
    /// as `predict`; the plan's bins: `bins`, or one per wanted epoch when
    /// the goal asked for more), the nearest in phase when several share it,
    /// whenever in the season it was taken; a done visit in a bin no wanted
    /// epoch is in gives none (the plan still needs those bins).
    fn covered(
        &self,
        s: &Setting,
        done: &[Epoch],
        wanted: &[Epoch],
    ) -> Result<Vec<Option<String>>> {
        let star = Star::from_target(s.target)?;
        let n = self.bins.max(wanted.len()).max(1);
        let phase = |e: &Epoch| -> Result<f64> {
            let b = crate::astro::bary::bjd_tdb(s.site, e.time, &star.place)?;
            Ok(star.ephemeris.phase(&b))
        };
        let bin = |p: f64| ((p * n as f64).floor() as usize).min(n - 1);
        let apart = |a: f64, b: f64| {
            let d = (a - b).rem_euclid(1.0);
            d.min(1.0 - d)
        };
        let want: Vec<f64> = wanted.iter().map(phase).collect::<Result<_>>()?;
        let mut out: Vec<Option<String>> = vec![None; wanted.len()];
        for d in done {
            let pd = phase(d)?;
            let b = bin(pd);
            let best = (0..wanted.len())
                .filter(|k| out[*k].is_none() && bin(want[*k]) == b)
                .min_by(|x, y| apart(pd, want[*x]).total_cmp(&apart(pd, want[*y])));
            if let Some(k) = best {
                out[k] = Some(format!(
                    "phase bin {} of {n} already observed (phase {pd:.2}, visit done at {})",
                    b + 1,
                    d.time.iso()
                ));
            }
        }
        Ok(out)
    }

    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        self.goal_with(s, em, goal_pct, &mut KnownWindows::default())
    }

    /// The goals of one target keep its phase windows between asks (the
    /// same answers as [`Method::goal`]: see [`KnownWindows`]).
    fn goal_search(&self) -> Box<dyn crate::ladder::GoalSearch + '_> {
        Box::new(PulsatorGoals {
            m: self,
            known: KnownWindows::default(),
        })
    }
}

impl PulsatorMethod {
    /// [`Method::goal`] with the star's phase windows from `known`.
    fn goal_with(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
        known: &mut KnownWindows,
    ) -> Result<Prediction> {
        // A star no relation applies to is refused with the reason.
        Star::from_target(s.target)?
            .relation(&self.config)
            .map_err(|e| name_target(e, s))?;
        let r = self.goal_plan_report(s, em, goal_pct, known)?;
        r.prediction.ok_or_else(|| {
            RungError::invalid(
                format!("target '{}'", s.target.name),
                "no prediction could be made (no mean magnitude or no period–luminosity relation for its class and band)",
            )
        })
    }
}

/// The goals of one pulsator asked one after another (the budget's inverse
/// curve), its phase windows kept between asks.
struct PulsatorGoals<'a> {
    m: &'a PulsatorMethod,
    known: KnownWindows,
}

impl crate::ladder::GoalSearch for PulsatorGoals<'_> {
    fn goal(&mut self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        self.m.goal_with(s, em, goal_pct, &mut self.known)
    }
}

/// A star's phase windows over a range and its nights without one
/// ([`phase_windows`]), with what they were worked out for: the site, the
/// star's place and ephemeris, the nights and the limits, which are all
/// they depend on. A goal's plan asks them up to four times (template,
/// Fourier plan, two raises of the SNR) and the goals of a target's inverse
/// curve ask them again: each ask of the same inputs is handed the same
/// windows, so every answer is the one worked out afresh.
#[derive(Default)]
pub(crate) struct KnownWindows {
    kept: Option<(WindowsKey, Vec<PhaseWindow>, Vec<NaiveDate>)>,
}

/// The inputs of [`phase_windows`].
type WindowsKey = (
    crate::astro::site::Site,
    crate::astro::frames::CatalogPlace,
    Ephemeris,
    NaiveDate,
    NaiveDate,
    crate::astro::window::Limits,
);

impl KnownWindows {
    /// The phase windows of `star` over the setting's nights, worked out
    /// when the inputs differ from the last ones (an error is not kept).
    fn of(&mut self, s: &Setting, star: &Star) -> Result<(Vec<PhaseWindow>, Vec<NaiveDate>)> {
        let key: WindowsKey = (
            s.site.clone(),
            star.place,
            star.ephemeris,
            s.from,
            s.to,
            s.limits,
        );
        if let Some((k, w, d)) = &self.kept
            && *k == key
        {
            return Ok((w.clone(), d.clone()));
        }
        let (w, d) = phase_windows(s.site, star, s.from, s.to, &s.limits)?;
        self.kept = Some((key, w.clone(), d.clone()));
        Ok((w, d))
    }
}
