//! The chase night by night: windows after the discovery, the classification
//! spectrum on the first usable night, an epoch in every band of the chase
//! with its exposures, and the cadence that follows practice (a point before
//! maximum, every 2–3 nights around it, sparser on the decline) with the
//! fewest telescope hours that still meets the goal when a night is lost.

use super::config::TransientConfig;
use super::facts::{Facts, Placement};
use super::fit::{self, FitPrecision, Matrix, Measurement, measurement_sigma};
use super::standardize::{DistanceBudget, HostExtinction, Role, Standardizer};
use super::template::{CurveParams, Model};
use crate::astro::frames::CatalogPlace;
use crate::astro::night::Night;
use crate::astro::time::Instant;
use crate::astro::{pointing, sun_caution};
use crate::error::{Result, RungError};
use crate::ladder::{BandExposure, Epoch, ExposureModel, Setting, SpectrumExposure, Verdict};
use chrono::{Duration, NaiveDate};
use serde::Serialize;

/// The band name under which a visit lists its classification spectrum.
pub const SPECTRUM_BAND: &str = "spectrum";

/// One band's exposure planned on a night.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BandPlan {
    /// Band.
    pub band: String,
    /// Expected magnitude at the epoch, mag.
    pub expected_mag: f64,
    /// Exposure for the SNR goal, s.
    pub exptime_s: f64,
    /// Sub-exposures.
    pub n_exposures: u32,
}

/// One night of the chase.
#[derive(Debug, Clone, PartialEq)]
pub struct ChaseNight {
    /// The local date whose evening starts the night.
    pub night: NaiveDate,
    /// Start of the longest observable window (after discovery and `now`).
    pub window_start: Option<Instant>,
    /// End of that window.
    pub window_end: Option<Instant>,
    /// Observable time in all windows, hours.
    pub observable_hours: f64,
    /// Planned mid-exposure instant (highest point in the window).
    pub epoch_time: Option<Instant>,
    /// Airmass then.
    pub best_airmass: Option<f64>,
    /// Moon–target separation then (or at local midnight without a window), degrees.
    pub moon_separation_deg: f64,
    /// Moon illuminated fraction then, 0–1.
    pub moon_illumination: f64,
    /// Moon altitude then, degrees.
    pub moon_altitude_deg: f64,
    /// Sun–target separation (solar elongation) then, degrees.
    pub solar_elongation_deg: f64,
    /// Rest-frame days from the predicted B maximum at the epoch.
    pub phase_days: Option<f64>,
    /// Expected magnitude in the primary band (B) at the epoch.
    pub expected_mag: Option<f64>,
    /// Exposure of all bands together, s.
    pub exptime_s: Option<f64>,
    /// Sub-exposures of all bands together.
    pub n_exposures: Option<u32>,
    /// The photometric visit with overheads and filter changes, s.
    pub visit_s: Option<f64>,
    /// The exposure in each band of the chase.
    pub bands: Vec<BandPlan>,
    /// The classification spectrum this night would take (unclassified
    /// targets, computed until one is planned).
    pub spectrum: Option<SpectrumExposure>,
    /// Why no spectrum could be computed this night, when it could not.
    pub spectrum_note: Option<String>,
    /// Whether the classification spectrum is planned this night.
    pub classification: bool,
    /// Whether an epoch can be taken this night.
    pub usable: bool,
    /// Why not, when it cannot.
    pub reason: Option<String>,
    /// Sun-proximity cautions at the planned times.
    pub cautions: Vec<String>,
    /// Why the epoch is not at the highest point, when it is not.
    pub epoch_note: Option<String>,
    /// Whether the chosen cadence observes this night.
    pub planned: bool,
}

/// A cadence and what it buys.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CadenceDesign {
    /// Gap on the decline (and before the window around maximum), nights.
    pub cadence_days: u32,
    /// Gap inside the window around maximum, nights.
    pub near_max_every: u32,
    /// Whether the window around maximum is sampled more densely than the decline.
    pub dense_around_max: bool,
    /// Indices into the chase's nights.
    pub nights: Vec<usize>,
    /// The epochs (one visit each, every band; the classification spectrum
    /// is listed in its night's visit as the band `spectrum`).
    pub epochs: Vec<Epoch>,
    /// Light-curve precision (`None` when the epochs do not fix the curve).
    pub fit: Option<FitPrecision>,
    /// Distance budget (`None` without a fit).
    pub budget: Option<DistanceBudget>,
    /// The fit's σ_μ with the worst single planned night lost, mag.
    pub sigma_mu_phot_one_lost_mag: Option<f64>,
    /// That night.
    pub worst_lost_night: Option<NaiveDate>,
    /// Telescope hours with overheads (the classification spectrum included).
    pub hours_needed: f64,
    /// Whether the design meets the requirement it was sized for.
    pub meets_requirement: bool,
    /// Whether its epochs sample the peak as practice asks (`cadence` in
    /// config/transient.toml); the precision of a curve that does not is
    /// only the template's extrapolation.
    pub samples_peak: bool,
}

/// A sparser cadence than the one chosen and why it fails.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CadenceTrial {
    /// Gap around maximum, nights.
    pub near_max_every: u32,
    /// Gap on the decline, nights.
    pub cadence_days: u32,
    /// Epochs it would take.
    pub epochs: usize,
    /// Hours it would take.
    pub hours: f64,
    /// σ_μ from the light curve, mag.
    pub sigma_mu_phot_mag: Option<f64>,
    /// Why it is not chosen.
    pub reason: String,
    /// The trial in words (what `rung chase` prints and the Chase view
    /// shows): its gaps, epochs, hours and reason.
    pub text: String,
}

impl CadenceTrial {
    /// The trial in words: "every 4 nights around maximum, every 10 on the
    /// decline (9 epochs, 0.92 h): <reason>".
    pub fn words(near: u32, far: u32, epochs: usize, hours: f64, reason: &str) -> String {
        format!(
            "{} ({epochs} epochs, {hours:.2} h): {reason}",
            cadence_label(near, far)
        )
    }
}

/// A cadence in words: "every 3 nights around maximum, every 10 on the
/// decline" (every usable night when a gap is 1).
pub fn cadence_label(near: u32, far: u32) -> String {
    let every = |g: u32| {
        if g == 1 {
            "every usable night".to_string()
        } else {
            format!("every {g} nights")
        }
    };
    if far > near {
        format!(
            "{} around maximum, {} on the decline",
            every(near),
            every(far).replace("every usable night", "every night")
        )
    } else {
        format!("{} around maximum and on the decline", every(near))
    }
}

/// What the cadence search compared: every pair of gaps (every g nights
/// within the days around maximum, every n ≥ g outside), how many met the
/// requirement, and the requirement.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CadenceSearch {
    /// Cadences tried.
    pub tried: usize,
    /// Those that meet the requirement (the chosen one among them, unless
    /// none does).
    pub passing: usize,
    /// The largest gap tried, nights (`max_every_n`, config/transient.toml).
    pub max_every_n: u32,
    /// The largest gap around maximum practice allows, nights.
    pub max_gap_near_max_nights: u32,
    /// σ_μ the light curve may add so the goal holds, mag.
    pub need_phot_mag: f64,
    /// Whether a design must survive one planned night lost.
    pub robust: bool,
}

/// The classification step.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassificationPlan {
    /// `candidate`, or the class given (`Ia` for a thermonuclear supernova).
    pub status: String,
    /// Whether a classification spectrum is still needed.
    pub needed: bool,
    /// The night it is planned on.
    pub night: Option<NaiveDate>,
    /// Mid-exposure.
    pub time: Option<Instant>,
    /// Its exposure.
    pub spectrum: Option<SpectrumExposure>,
    /// What the observer should know.
    pub note: String,
}

/// What the chase plan says.
#[derive(Debug, Clone, PartialEq)]
pub struct Chase {
    /// Target name.
    pub target: String,
    /// Band of the target's magnitudes.
    pub band: String,
    /// Bands of the chase, primary first.
    pub bands: Vec<String>,
    /// Standardization, zero point and cosmology.
    pub standardizer: Standardizer,
    /// Hubble flow, calibrator or unanchored.
    pub role: Role,
    /// The placed light curve.
    pub placement: Placement,
    /// Predicted time of B maximum.
    pub t_max: Instant,
    /// SNR asked of each band at each epoch.
    pub snr_goal: f64,
    /// Distance goal, percent.
    pub goal_pct: f64,
    /// The nights from the first to the horizon.
    pub nights: Vec<ChaseNight>,
    /// Last night with an observable window.
    pub last_night: Option<NaiveDate>,
    /// Whether the target is still observable on the last night of the horizon.
    pub observable_at_horizon: bool,
    /// The classification step.
    pub classification: ClassificationPlan,
    /// Whether the plan is provisional (not yet classified).
    pub provisional: bool,
    /// The chosen cadence.
    pub design: CadenceDesign,
    /// Sparser cadences and why they fail.
    pub sparser: Vec<CadenceTrial>,
    /// What the cadence search compared.
    pub cadence_search: CadenceSearch,
    /// Host dust expected from the colour curve.
    pub host_extinction: Option<HostExtinction>,
    /// Expected standardized peak absolute magnitude in B (the calibrator's
    /// result), mag.
    pub peak_abs_mag: f64,
    /// Whether the distance precision meets the goal.
    pub goal_met: bool,
    /// Verdict for the distance goal.
    pub verdict: Verdict,
    /// Sun-proximity cautions (all nights).
    pub cautions: Vec<String>,
    /// Explanations.
    pub notes: Vec<String>,
}

/// What a calibrator's chase makes of the peak absolute magnitude: the
/// standardization's zero point as this supernova and its host's distance
/// give it, with its error split into the host's distance and the
/// supernova's own (light-curve fit, intrinsic scatter, extinction).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Calibration {
    /// The host's distance modulus, mag.
    pub host_mu_mag: f64,
    /// Its σ, mag.
    pub host_mu_err_mag: f64,
    /// The calibrated standardized peak absolute magnitude M_B, mag: the
    /// configured zero point moved by how far the supernova's standardized
    /// distance modulus lies from its host's (0 when the peak is placed from
    /// the host's distance).
    pub peak_abs_mag: f64,
    /// Its σ, mag: the two parts in quadrature.
    pub sigma_mag: f64,
    /// The part from the host's distance, mag.
    pub sigma_host_mag: f64,
    /// The part from the supernova itself (everything else in its budget), mag.
    pub sigma_own_mag: f64,
}

impl Chase {
    /// Why this cadence, in words (text and `--json` `cadence_choice`):
    /// what was compared, what passed, and why the chosen one won; then
    /// each sparser cadence tried beside it and why it lost.
    pub fn cadence_choice(&self) -> String {
        let k = &self.cadence_search;
        let d = &self.design;
        let rule = format!(
            "the peak sampled at least every {} nights and the curve where the fit learns it, the light curve's σ_μ at most {:.3} mag so that the goal holds{}",
            k.max_gap_near_max_nights,
            k.need_phot_mag,
            if k.robust {
                ", also with any one planned night lost"
            } else {
                ""
            }
        );
        let head = format!(
            "{} cadences compared (every g = 1–{m} nights around maximum, every n = g–{m} nights on the decline)",
            k.tried,
            m = k.max_every_n
        );
        if !d.meets_requirement {
            return format!(
                "{head}: none meets the requirement ({rule}); the plan shows {} ({} epochs, {:.2} h)",
                cadence_label(d.near_max_every, d.cadence_days),
                d.epochs.len(),
                d.hours_needed
            );
        }
        let mut out = format!(
            "{head}: {} meet{} the requirement ({rule}); {} takes the fewest telescope hours of them ({} epochs, {:.2} h)",
            k.passing,
            if k.passing == 1 { "s" } else { "" },
            cadence_label(d.near_max_every, d.cadence_days),
            d.epochs.len(),
            d.hours_needed
        );
        if !self.sparser.is_empty() {
            out.push_str("; sparser ones beside it: ");
            out.push_str(
                &self
                    .sparser
                    .iter()
                    .map(|t| t.text.clone())
                    .collect::<Vec<_>>()
                    .join("; "),
            );
        }
        out
    }

    /// The same in a few words for the Chase view: "3 n at max, 10 after:
    /// fewest h of 12/55 passing".
    pub fn cadence_short(&self) -> String {
        let d = &self.design;
        let k = &self.cadence_search;
        let gaps = if d.near_max_every == d.cadence_days {
            format!("every {} n", d.cadence_days)
        } else {
            format!("{} n at max, {} after", d.near_max_every, d.cadence_days)
        };
        if d.meets_requirement {
            format!("{gaps}: fewest h of {}/{} passing", k.passing, k.tried)
        } else {
            format!("{gaps}: none of {} passes", k.tried)
        }
    }

    /// The shortest form, for a narrow line: "3/10 n · 27/55 pass" (gaps
    /// around maximum / after it; cadences that pass / compared).
    pub fn cadence_compact(&self) -> String {
        let d = &self.design;
        let k = &self.cadence_search;
        let gaps = if d.near_max_every == d.cadence_days {
            format!("{} n", d.cadence_days)
        } else {
            format!("{}/{} n", d.near_max_every, d.cadence_days)
        };
        let pass = if d.meets_requirement { k.passing } else { 0 };
        format!("{gaps} · {pass}/{} pass", k.tried)
    }

    /// The calibration a calibrator's chase gives (`None` for another role,
    /// or when the planned epochs do not fix the light curve).
    pub fn calibration(&self) -> Option<Calibration> {
        let Role::Calibrator {
            host_mu_mag,
            host_mu_err_mag,
        } = self.role
        else {
            return None;
        };
        let b = self.design.budget.as_ref()?;
        let own = (b.sigma_mu_mag.powi(2) - host_mu_err_mag.powi(2))
            .max(0.0)
            .sqrt();
        let shift = self
            .placement
            .hubble_peak_mag
            .map_or(0.0, |h| self.placement.params.m_max - h);
        Some(Calibration {
            host_mu_mag,
            host_mu_err_mag,
            peak_abs_mag: self.standardizer.zero_point.abs_mag + shift,
            sigma_mag: b.sigma_mu_mag,
            sigma_host_mag: host_mu_err_mag,
            sigma_own_mag: own,
        })
    }
}

/// The night (local date whose evening starts it) that contains instant `t` at `site`.
pub fn night_of(site: &crate::astro::site::Site, t: Instant) -> NaiveDate {
    crate::astro::night::night_of(site, t)
}

/// Everything a night row needs beside the night.
pub(crate) struct RowInput<'a> {
    pub cfg: &'a TransientConfig,
    pub model: &'a Model,
    pub facts: &'a Facts,
    pub pl: &'a Placement,
    pub snr: f64,
    pub not_before: Instant,
}

/// Whether a predicted magnitude is fainter than any exposure reaches
/// (`bounds::MAG`): the supernova has faded past anything measured (a
/// discovery long past, or a date typed wrong). The night's row and the
/// chase's note say so in these terms.
pub(crate) fn faded_past_any_exposure(mag: f64) -> bool {
    mag > crate::bounds::MAG.max
}

/// One night of the chase: window after `not_before`, the epoch at the
/// highest point in the longest window, each band's magnitude and exposure,
/// and (unclassified targets) the classification spectrum's exposure.
pub(crate) fn night_row(
    s: &Setting,
    em: &dyn ExposureModel,
    place: &CatalogPlace,
    inp: &RowInput,
    date: NaiveDate,
) -> Result<ChaseNight> {
    let site = s.site;
    let night = Night::shared(site, date)?;
    let tn = night.windows(place, &s.limits);
    let nb = inp.not_before;
    let windows: Vec<(Instant, Instant)> = tn
        .windows
        .iter()
        .filter(|w| w.1.seconds_since(&nb) > 0.0)
        .map(|w| {
            if w.0.seconds_since(&nb) < 0.0 {
                (nb, w.1)
            } else {
                *w
            }
        })
        .collect();
    let hours: f64 = windows
        .iter()
        .map(|w| w.1.seconds_since(&w.0) / 3600.0)
        .sum();
    let main = windows.iter().copied().max_by(|a, b| {
        a.1.seconds_since(&a.0)
            .partial_cmp(&b.1.seconds_since(&b.0))
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let mut row = ChaseNight {
        night: date,
        window_start: main.map(|w| w.0),
        window_end: main.map(|w| w.1),
        observable_hours: hours,
        epoch_time: None,
        best_airmass: None,
        moon_separation_deg: f64::NAN,
        moon_illumination: f64::NAN,
        moon_altitude_deg: f64::NAN,
        solar_elongation_deg: f64::NAN,
        phase_days: None,
        expected_mag: None,
        exptime_s: None,
        n_exposures: None,
        visit_s: None,
        bands: Vec::new(),
        spectrum: None,
        spectrum_note: None,
        classification: false,
        usable: false,
        reason: None,
        cautions: Vec::new(),
        epoch_note: None,
        planned: false,
    };
    let Some((ws, we)) = main else {
        let mid = night
            .start
            .add_seconds(night.end.seconds_since(&night.start) / 2.0);
        let p = pointing(site, &night.context(mid), place);
        row.moon_separation_deg = p.moon_separation_deg;
        row.moon_illumination = p.moon_illumination;
        row.moon_altitude_deg = p.moon_altitude_deg;
        row.solar_elongation_deg = p.sun_separation_deg;
        row.reason = Some(if tn.windows.is_empty() {
            format!(
                "no window above {:.0}° with the Sun below {:.0}° (solar elongation {:.0}°)",
                s.limits.min_alt_deg, s.limits.sun_alt_deg, p.sun_separation_deg
            )
        } else {
            "the night's window is over before discovery (or now)".to_string()
        });
        return Ok(row);
    };
    let t = match tn.max_altitude_time {
        Some(tm) if tm.seconds_since(&ws) >= 0.0 && we.seconds_since(&tm) >= 0.0 => tm,
        Some(tm) if tm.seconds_since(&ws) < 0.0 => ws,
        Some(_) => we,
        None => ws.add_seconds(we.seconds_since(&ws) / 2.0),
    };
    // The highest point first; when the exposure model refuses it (for
    // example an airmass rule at the zenith), 30 min either side.
    let clamp = |x: Instant| {
        if x.seconds_since(&ws) < 0.0 {
            ws
        } else if we.seconds_since(&x) < 0.0 {
            we
        } else {
            x
        }
    };
    let tries = [
        t,
        clamp(t.add_seconds(-1800.0)),
        clamp(t.add_seconds(1800.0)),
    ];
    let model = inp.model;
    let p = &inp.pl.params;
    let mut first_err: Option<String> = None;
    let mut found: Option<(Instant, Vec<BandPlan>)> = None;
    'times: for (k, tt) in tries.iter().enumerate() {
        if k > 0 && tries[..k].contains(tt) {
            continue;
        }
        let ctx = night.context(*tt);
        let pt = pointing(site, &ctx, place);
        let t_mjd = tt.mjd_utc();
        row.epoch_time = Some(*tt);
        row.best_airmass = pt.airmass;
        row.moon_separation_deg = pt.moon_separation_deg;
        row.moon_illumination = pt.moon_illumination;
        row.moon_altitude_deg = pt.moon_altitude_deg;
        row.solar_elongation_deg = pt.sun_separation_deg;
        row.phase_days = Some((t_mjd - p.t_max_mjd) / (1.0 + model.z));
        let mut plans = Vec::with_capacity(inp.facts.bands.len());
        for b in &inp.facts.bands {
            let Some(mag) = model.mag(model.band_index(b)?, p, t_mjd) else {
                row.reason = Some("before the predicted explosion".into());
                return Ok(row);
            };
            if b == "B" {
                row.expected_mag = Some(mag);
            }
            match em.exptime(mag, b, inp.snr, &ctx, place) {
                Ok((e, n)) => plans.push(BandPlan {
                    band: b.clone(),
                    expected_mag: mag,
                    exptime_s: e,
                    n_exposures: n,
                }),
                Err(e) => {
                    first_err.get_or_insert_with(|| {
                        if faded_past_any_exposure(mag) {
                            // Faded past anything measured (a discovery
                            // date long past, or one typed wrong): said
                            // plainly, not as a refused magnitude.
                            format!(
                                "no exposure for {b}: predicted {mag:.1} mag, fainter than any exposure reaches ({} mag)",
                                crate::bounds::MAG.max
                            )
                        } else {
                            format!("no exposure for {b} = {mag:.1} mag: {e}")
                        }
                    });
                    continue 'times;
                }
            }
        }
        found = Some((*tt, plans));
        break;
    }
    let Some((t, plans)) = found else {
        row.reason = first_err;
        return Ok(row);
    };
    if let Some(e) = first_err {
        row.epoch_note = Some(format!(
            "epoch moved 30 min from the highest point, where the exposure model refused ({e})"
        ));
    }
    let total: f64 = plans.iter().map(|b| b.exptime_s).sum();
    let n_total: u32 = plans.iter().map(|b| b.n_exposures).sum();
    let visit = em.visit_overhead_s()
        + plans
            .iter()
            .map(|b| b.exptime_s + b.n_exposures as f64 * em.readout_s())
            .sum::<f64>()
        + (plans.len().saturating_sub(1)) as f64
            * em.filter_change_s()
                .unwrap_or(inp.cfg.planning.filter_change_s);
    row.exptime_s = Some(total);
    row.n_exposures = Some(n_total);
    row.visit_s = Some(visit);
    let win_s = we.seconds_since(&ws);
    let max_e = inp.cfg.planning.max_exptime_s;
    if let Some(b) = plans
        .iter()
        .find(|b| !b.exptime_s.is_finite() || b.exptime_s > max_e)
    {
        row.reason = Some(format!(
            "{} = {:.1} mag needs {:.0} s for SNR {:.0}, more than the {:.0} s allowed per band",
            b.band, b.expected_mag, b.exptime_s, inp.snr, max_e
        ));
    } else if visit > win_s {
        row.reason = Some(format!(
            "the visit ({:.0} min) does not fit the window ({:.0} min)",
            visit / 60.0,
            win_s / 60.0
        ));
    } else {
        row.usable = true;
    }
    row.bands = plans;
    // The classification spectrum at the same time, while one is needed.
    if row.usable && inp.facts.needs_classification() {
        let c = &inp.cfg.classification;
        let k = model.band_index(&c.band).ok();
        let mag = k.and_then(|k| model.mag(k, p, t.mjd_utc()));
        if let Some(mag) = mag {
            let ctx = night.context(t);
            match em.spectrum_exptime(
                mag,
                &c.band,
                c.snr_per_resolution_element,
                c.wavelength_angstrom,
                &ctx,
                place,
            ) {
                Ok(sp) => row.spectrum = Some(sp),
                Err(e) => row.spectrum_note = Some(e.to_string()),
            }
        }
    }
    // Sun proximity at the start, middle and end of the visit, clamped to the window.
    let t0 = t.add_seconds(-visit / 2.0);
    let t0 = if t0.seconds_since(&ws) < 0.0 { ws } else { t0 };
    let t1 = t.add_seconds(visit / 2.0);
    let t1 = if we.seconds_since(&t1) < 0.0 { we } else { t1 };
    for tt in [t0, t, t1] {
        let pp = pointing(site, &night.context(tt), place);
        if let Some(c) = sun_caution(site, &pp) {
            row.cautions.push(format!("{} ({}): {c}", date, tt.iso()));
            break;
        }
    }
    Ok(row)
}

/// The measurements of a night's epoch in the model's bands.
pub(crate) fn night_measurements(
    cfg: &TransientConfig,
    model: &Model,
    n: &ChaseNight,
    snr: f64,
) -> Vec<Measurement> {
    let Some(t) = n.epoch_time else {
        return Vec::new();
    };
    let sigma = measurement_sigma(
        snr,
        cfg.planning.phot_floor_mag,
        cfg.template.model_error_mag,
    );
    n.bands
        .iter()
        .filter_map(|b| {
            Some(Measurement {
                t_mjd: t.mjd_utc(),
                band: model.band_index(&b.band).ok()?,
                sigma_mag: sigma,
            })
        })
        .collect()
}

/// The epoch of a usable night: every band, plus the classification
/// spectrum when it is planned that night.
pub(crate) fn night_epoch(n: &ChaseNight, snr: f64) -> Option<Epoch> {
    let mut exposures: Vec<BandExposure> = n
        .bands
        .iter()
        .map(|b| BandExposure {
            band: b.band.clone(),
            exptime_s: b.exptime_s,
            n_exposures: b.n_exposures,
            snr,
        })
        .collect();
    let mut visit = n.visit_s?;
    if n.classification
        && let Some(sp) = &n.spectrum
    {
        exposures.push(BandExposure {
            band: SPECTRUM_BAND.into(),
            exptime_s: sp.exptime_s,
            n_exposures: sp.n_exposures,
            snr: sp.snr_per_resolution_element,
        });
        // The spectrograph's acquisition on the slit, exposures and
        // readouts follow the photometry in the same visit.
        visit += sp.visit_s;
    }
    Some(Epoch {
        time: n.epoch_time?,
        exptime_s: exposures.iter().map(|e| e.exptime_s).sum(),
        n_exposures: exposures.iter().map(|e| e.n_exposures).sum(),
        snr,
        airmass: n.best_airmass.unwrap_or(f64::NAN),
        visit_s: visit,
        exposures,
    })
}

/// What one design is evaluated to.
pub(crate) struct Evaluation {
    pub fit: Option<FitPrecision>,
    pub budget: Option<DistanceBudget>,
    pub lost: Option<(NaiveDate, f64)>,
    pub sampled: std::result::Result<(), String>,
}

/// The cadence search's view of the nights.
pub(crate) struct Search<'a> {
    pub cfg: &'a TransientConfig,
    pub model: &'a Model,
    pub std: &'a Standardizer,
    pub params: &'a CurveParams,
    pub role: Role,
    pub z: Option<f64>,
    pub nights: &'a [ChaseNight],
    /// Information of each night's epoch.
    pub info: Vec<Matrix>,
    pub prior: Matrix,
}

impl Search<'_> {
    pub fn evaluate(&self, idx: &[usize], robust: bool) -> Result<Evaluation> {
        let mut f = self.prior;
        for &i in idx {
            f = fit::add(&f, &self.info[i]);
        }
        let fitp = fit::precision(&f);
        let budget = self
            .std
            .budget(self.cfg, self.model, fitp.as_ref(), self.role, self.z)?;
        let budget = fitp.map(|_| budget);
        let mut lost: Option<(NaiveDate, f64)> = None;
        if robust && fitp.is_some() {
            let g = self.std.gradient(self.cfg, self.model);
            for &i in idx {
                let s = fit::precision(&fit::sub(&f, &self.info[i]))
                    .map(|p| fit::variance_of(&p.covariance, &g).sqrt())
                    .unwrap_or(f64::INFINITY);
                if lost.is_none_or(|(_, w)| s > w) {
                    lost = Some((self.nights[i].night, s));
                }
            }
        }
        let phases: Vec<f64> = idx
            .iter()
            .filter_map(|i| self.nights[*i].phase_days)
            .collect();
        Ok(Evaluation {
            fit: fitp,
            budget,
            lost,
            sampled: self.cfg.cadence.sampled(&phases),
        })
    }

    /// The nights of a design: the first usable night (the point before
    /// maximum when the discovery allows it), then every `near` nights inside
    /// the window around maximum and every `far` nights outside it, plus the
    /// classification night.
    pub fn select(&self, usable: &[usize], near: u32, far: u32, spec: Option<usize>) -> Vec<usize> {
        let k = &self.cfg.cadence;
        let z1 = 1.0 + self.model.z;
        let w0 = self.params.t_max_mjd + k.near_max_from_days * z1;
        let w1 = self.params.t_max_mjd + k.near_max_to_days * z1;
        let mut idx: Vec<usize> = Vec::new();
        let mut last: Option<NaiveDate> = None;
        for &i in usable {
            let n = &self.nights[i];
            let t = n.epoch_time.map(|t| t.mjd_utc()).unwrap_or(f64::NAN);
            let gap = if (w0..=w1).contains(&t) { near } else { far };
            if last.is_none_or(|d| n.night >= d + Duration::days(gap as i64)) {
                idx.push(i);
                last = Some(n.night);
            }
        }
        if let Some(s) = spec
            && !idx.contains(&s)
        {
            idx.push(s);
            idx.sort_unstable();
        }
        idx
    }
}

/// The requirement a design is sized for.
pub(crate) struct Requirement {
    pub need_phot_mag: f64,
    pub sigma_peak_goal_mag: Option<f64>,
    pub sigma_dm15_goal: Option<f64>,
    pub robust: bool,
}

impl Requirement {
    /// Whether an evaluation meets it, and if not, why (in words).
    pub fn judge(&self, e: &Evaluation) -> std::result::Result<(), String> {
        let (Some(f), Some(b)) = (&e.fit, &e.budget) else {
            return Err(
                "does not fix the time of maximum, the peak, the decline and the colour together"
                    .into(),
            );
        };
        e.sampled.clone()?;
        if b.sigma_mu_phot_mag > self.need_phot_mag {
            return Err(format!(
                "the light curve gives σ_μ {:.3} mag, more than the {:.3} mag the goal leaves it",
                b.sigma_mu_phot_mag, self.need_phot_mag
            ));
        }
        if let Some(g) = self.sigma_peak_goal_mag
            && f.sigma_peak_mag > g
        {
            return Err(format!(
                "σ(peak) {:.3} mag, more than the {g} asked",
                f.sigma_peak_mag
            ));
        }
        if let Some(g) = self.sigma_dm15_goal
            && f.sigma_dm15 > g
        {
            return Err(format!(
                "σ(Δm15) {:.3} mag, more than the {g} asked",
                f.sigma_dm15
            ));
        }
        if self.robust
            && let Some((d, s)) = e.lost
            && s > self.need_phot_mag
        {
            return Err(format!(
                "losing the night of {d} to weather leaves σ_μ {:.3} mag from the light curve, more than {:.3}",
                s, self.need_phot_mag
            ));
        }
        Ok(())
    }
}

/// Check a night range of the chase.
pub(crate) fn check_range(from: NaiveDate, to: NaiveDate) -> Result<()> {
    if to < from {
        return Err(RungError::invalid(
            "range",
            format!("the last night {to} is before the first night of the chase {from}"),
        ));
    }
    Ok(())
}
