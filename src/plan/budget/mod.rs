//! The distance-goal budget: for each target, the method, the precision it can
//! reach, the epochs, exposures and hours it takes, and a verdict; totals by
//! month and by the site's semesters; the hours with the site's weather
//! (expected and a pessimistic quantile, [`weather`]) and the instrument's
//! overheads; and, given the hours asked, the allocation that meets the most
//! priority-weighted goals ([`allocation`], solved exactly by [`alloc`]), what
//! each target reaches with its share ([`curve`]), what is left and what more
//! hours would buy.
//!
//! Semesters are the site's (`semesters` in the site catalogue); without
//! them, the common practice of many observatories (not a standard): A runs
//! from 1 February to 31 July, B from 1 August to 31 January; January belongs
//! to the B semester of the year before.

pub mod alloc;
pub mod allocation;
pub mod compare;
pub mod curve;
pub mod figure;
pub mod proposal;
pub mod weather;

pub use allocation::{Allocation, Asked, GainStep, allocate};
pub use curve::CurvePoint;

use crate::astro::site::Climate;
use crate::error::Result;
use crate::io::targets::{Kind, Target};
use crate::ladder::{Prediction, Verdict};
use crate::output::{csv_num, csv_table, fixed, md_cell, num};
use crate::programme::Settings;
use chrono::{Datelike, NaiveDate};
use serde::Serialize;
use std::collections::BTreeMap;
use weather::{DEFAULT_CLEAR_FRACTION, HoursDistribution, NightLoad};

/// One target's line of the budget.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BudgetRow {
    /// Target name.
    pub target: String,
    /// Method.
    pub kind: Kind,
    /// Goal σ_d/d, percent.
    pub goal_pct: f64,
    /// What the method reaches with the epochs below, percent.
    pub achievable_pct: f64,
    /// Number of epochs.
    pub epochs: usize,
    /// Mean exposure per epoch, seconds.
    pub exptime_per_epoch_s: f64,
    /// Hours with the method's overheads (acquisition, readouts, filter
    /// changes), clear weather.
    pub hours: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// Short verdict label: reachable, floor, not_observable, more_seasons.
    pub verdict_label: String,
    /// Hours by month (YYYY-MM).
    pub hours_by_month: BTreeMap<String, f64>,
    /// The method's notes.
    pub notes: Vec<String>,
    /// The terms of `achievable_pct`, as the method gives them (its
    /// `error_terms`, in quadrature; for a parallax the fit, the DCR bias
    /// bound and the relative-to-absolute correction; empty without a
    /// finite precision): which term sets a floor.
    pub error_terms: Vec<crate::ladder::ErrorTerm>,
    /// The target's priority (the weight of its goal in the allocation).
    pub priority: f64,
    /// Nights its epochs fall on.
    pub nights: usize,
    /// Hours by the site's semester (clear weather).
    pub hours_by_semester: BTreeMap<String, f64>,
    /// Expected scheduled hours with the site's weather (`hours` / f by month).
    pub hours_expected: f64,
    /// The pessimistic quantile of the scheduled hours with the weather
    /// (`weather.confidence`).
    pub hours_pessimistic: f64,
    /// Seconds of open shutter over all epochs.
    pub exposure_s: f64,
    /// The inverse curve: σ_d/d against hours, from zero to the best the
    /// range allows (empty unless asked for).
    pub curve: Vec<CurvePoint>,
    /// The nights of its epochs with their clear-weather hours.
    #[serde(skip)]
    pub epoch_nights: Vec<(NaiveDate, f64)>,
    /// A field's stars (counted in its row, never in rows of their own;
    /// src/ladder/field.rs); empty for any other target.
    pub members: Vec<String>,
    /// What keeps the goal out of reach in the range, when it is: `error_term`,
    /// `floor`, `range`, `visibility` or `ephemeris` (as the allocation's shares say it);
    /// empty when the goal is reachable.
    pub limited_by: String,
    /// The same in words, with its numbers.
    pub limit: String,
    /// A parallax target's fit of these epochs (the numbers of `rung
    /// parallax` exactly: each epoch's error is evaluated at its night's
    /// context, as the plan did): `sigma_parallax_mas`, `sigma_pm_masyr` (and its RA
    /// and Dec parts), `corr_parallax_pm`, `baseline_yr` as keys of the row;
    /// absent for other targets.
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub parallax: Option<ParallaxFit>,
}

/// A target the budget has nothing to plan for: a supernova already
/// observed (its fitted peak's error, `peak_err_mag`, given) serves the
/// ladder with its measured peak; it is not a goal, and the budget counts it
/// in none of its goals, hours or curves.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ObservedRow {
    /// Target name.
    pub target: String,
    /// Its kind (`transient`).
    pub kind: Kind,
    /// What it serves on the ladder: `calibrator` (its row names a host, or
    /// gives a host distance) or `hubble_flow`.
    pub serves: String,
    /// The host its row names (a calibrator), else empty.
    pub host: String,
    /// Its peak as given, mag (its band).
    pub peak_mag: Option<f64>,
    /// Its peak's error as given, mag.
    pub peak_err_mag: Option<f64>,
    /// Always false: it is not counted among the goals.
    pub counted_as_goal: bool,
    /// The same in words (text, CSV, Markdown, LaTeX, justification and the
    /// Budget view print it).
    pub text: String,
}

/// The verdict column of a supernova already observed (Markdown, LaTeX,
/// the Budget view).
pub const OBSERVED_VERDICT: &str = "observed: serves the ladder, not a goal";

/// Why a supernova already observed (`peak_err_mag` given) has nothing to
/// plan, without its name: "observed (peak 5.60 ± 0.05 mag given), nothing
/// to plan: serves the ladder as a calibrator in LPO-G1". `None` for any
/// other target. The budget's line ([`observed_row`]) and `rung next`'s
/// reason say it in these words.
pub fn observed_words(t: &Target) -> Option<String> {
    observed_parts(t).map(|(_, why)| why)
}

/// What a supernova already observed serves (`calibrator` or
/// `hubble_flow`) and [`observed_words`].
fn observed_parts(t: &Target) -> Option<(&'static str, String)> {
    if t.kind != Kind::Transient || t.peak_err_mag.is_none() {
        return None;
    }
    let calibrator = !t.host.is_empty() || t.host_mu_mag.is_some();
    let serves = if calibrator {
        "calibrator"
    } else {
        "hubble_flow"
    };
    let role = if !t.host.is_empty() {
        format!("as a calibrator in {}", t.host)
    } else if calibrator {
        "as a calibrator".to_string()
    } else {
        "in the Hubble flow".to_string()
    };
    let peak = t
        .peak_mag
        .map(|m| {
            format!(
                "peak {} ± {} mag",
                num(m, 2),
                num(t.peak_err_mag.unwrap_or(0.0), 2)
            )
        })
        .unwrap_or_else(|| format!("peak error {} mag", num(t.peak_err_mag.unwrap_or(0.0), 2)));
    Some((
        serves,
        format!("observed ({peak} given), nothing to plan: serves the ladder {role}"),
    ))
}

/// The budget's line for a supernova already observed (`peak_err_mag`
/// given): nothing to plan, it serves the ladder. `None` for any other target.
pub fn observed_row(t: &Target) -> Option<ObservedRow> {
    let (serves, why) = observed_parts(t)?;
    Some(ObservedRow {
        target: t.name.clone(),
        kind: t.kind,
        serves: serves.into(),
        host: t.host.clone(),
        peak_mag: t.peak_mag,
        peak_err_mag: t.peak_err_mag,
        counted_as_goal: false,
        text: format!("{}: {why}, not counted as a goal", t.name),
    })
}

/// The structured figures of a parallax row, the same keys as `rung
/// parallax --json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ParallaxFit {
    /// σ of the parallax from the fit, mas.
    pub sigma_parallax_mas: f64,
    /// The larger of the two proper-motion σ, mas/yr.
    pub sigma_pm_masyr: f64,
    /// σ of μα cos δ, mas/yr.
    pub sigma_pm_ra_masyr: f64,
    /// σ of μδ, mas/yr.
    pub sigma_pm_dec_masyr: f64,
    /// The larger in absolute value of the ϖ–μ correlations.
    pub corr_parallax_pm: f64,
    /// Last minus first epoch, years.
    pub baseline_yr: f64,
}

impl From<&crate::ladder::parallax::Solution> for ParallaxFit {
    fn from(s: &crate::ladder::parallax::Solution) -> Self {
        ParallaxFit {
            sigma_parallax_mas: s.sigma_parallax_mas,
            sigma_pm_masyr: s.sigma_pm_masyr,
            sigma_pm_ra_masyr: s.sigma_pm_ra_masyr,
            sigma_pm_dec_masyr: s.sigma_pm_dec_masyr,
            corr_parallax_pm: s.corr_parallax_pm,
            baseline_yr: s.baseline_yr,
        }
    }
}

/// The weather the budget assumes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WeatherInfo {
    /// Clear fraction by month, January first.
    pub clear_fraction: [f64; 12],
    /// Where it comes from.
    pub source: String,
    /// Whether the site gives none and the default is used.
    pub default_used: bool,
    /// The quantile of the pessimistic hours (e.g. 0.9).
    pub confidence: f64,
}

/// The overheads the budget charges, from the instrument profile.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Overheads {
    /// The instrument.
    pub instrument: String,
    /// Acquisition (slew, centring, guiding) per visit, s.
    pub acquisition_s: f64,
    /// Readout per exposure, s.
    pub readout_s: f64,
    /// Filter change between bands of a visit, s (the instrument's, else the method's).
    pub filter_change_s: Option<f64>,
    /// Calibrations per night observed, s.
    pub calibration_s_per_night: f64,
    /// Nights the budget's epochs fall on.
    pub calibration_nights: usize,
    /// Calibration hours, clear weather.
    pub calibration_hours: f64,
    /// Open-shutter hours of every epoch.
    pub exposure_hours: f64,
    /// Every other hour: acquisition, readouts, filter changes, spectra's set-up.
    pub visit_overhead_hours: f64,
}

/// One semester of the range.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SemesterInfo {
    /// Label ("2027A").
    pub label: String,
    /// First day of the semester.
    pub from: NaiveDate,
    /// Last day of the semester.
    pub to: NaiveDate,
    /// Hours needed in it (targets and calibrations), clear weather.
    pub hours: f64,
    /// The same, expected with the weather.
    pub hours_expected: f64,
}

/// The budget of a programme.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Budget {
    /// One row per target with a distance method.
    pub rows: Vec<BudgetRow>,
    /// Targets left out (no method, or the method failed), with the reason.
    pub skipped: Vec<(String, String)>,
    /// Supernovae already observed: nothing to plan, they serve the ladder,
    /// not counted as goals (nor in `rows`, hours or curves).
    pub observed: Vec<ObservedRow>,
    /// Hours by month (YYYY-MM) over all targets.
    pub hours_by_month: BTreeMap<String, f64>,
    /// Hours by semester (e.g. 2026B), targets only, clear weather.
    pub hours_by_semester: BTreeMap<String, f64>,
    /// The science hours: every target's plan with its visit overheads,
    /// clear weather, without calibrations (the same as `science_hours`;
    /// the key predates the total with calibrations, which is the total).
    pub total_hours: f64,
    /// The science hours (clear weather): the sum of the rows' `hours`.
    /// Science + calibrations = total (`total_hours_with_calibrations`).
    pub science_hours: f64,
    /// The calibration hours (clear weather): `calibration_s_per_night` on
    /// each night the epochs fall on.
    pub calibration_hours: f64,
    /// The science hours expected with the weather: the sum of the rows'
    /// `hours_expected`.
    pub science_hours_expected: f64,
    /// The calibration hours expected with the weather. Science +
    /// calibrations = `total_hours_expected`.
    pub calibration_hours_expected: f64,
    /// Site name.
    pub site: String,
    /// Instrument name.
    pub instrument: String,
    /// First night of the range.
    pub from: NaiveDate,
    /// Last night of the range.
    pub to: NaiveDate,
    /// The weather assumed.
    pub weather: WeatherInfo,
    /// The overheads charged.
    pub overheads: Overheads,
    /// The semesters of the range with their hours (targets and calibrations).
    pub semesters: Vec<SemesterInfo>,
    /// The total, clear weather: science + calibrations.
    pub total_hours_with_calibrations: f64,
    /// The total expected with the weather: science + calibrations.
    pub total_hours_expected: f64,
    /// The pessimistic quantile of the total (the programme's scheduled
    /// hours with calibrations; a quantile of the sum, not the sum of the
    /// rows' quantiles).
    pub total_hours_pessimistic: f64,
    /// The allocation of the hours asked, when hours were asked.
    pub allocation: Option<Allocation>,
    /// The programme's goals met against total hours (expected weather):
    /// the hours at which each further goal falls in, with or without hours
    /// asked (empty unless the curves were asked for; the allocation's
    /// `steps` when hours were asked).
    pub goals_met_curve: Vec<GainStep>,
}

/// What the budget computes beyond each target's goal.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Options {
    /// Each target's inverse curve (σ_d/d against hours).
    pub curves: bool,
    /// The hours asked, to allocate.
    pub asked: Option<Asked>,
    /// The quantile of the pessimistic hours; `None`: [`weather::DEFAULT_CONFIDENCE`].
    pub confidence: Option<f64>,
}

/// The semester label of a date with the common-practice calendar (2026A =
/// Feb–Jul 2026, 2026B = Aug 2026–Jan 2027); a site's own calendar is
/// [`Climate::semester_of`].
pub fn semester(d: NaiveDate) -> String {
    Climate::default().semester_of(d).0
}

pub use crate::programme::check_goal;

/// The clear fraction by month at the programme's site, with its source and
/// whether the default stands in.
pub fn clear_fraction(settings: &Settings) -> ([f64; 12], String, bool) {
    match &settings.site.climate.clear_fraction {
        Some(f) => (
            *f,
            settings
                .site
                .climate
                .clear_source
                .clone()
                .unwrap_or_else(|| format!("site catalogue ({})", settings.site.name)),
            false,
        ),
        None => (
            [DEFAULT_CLEAR_FRACTION; 12],
            format!(
                "default {DEFAULT_CLEAR_FRACTION} every month: the site gives no clear_fraction"
            ),
            true,
        ),
    }
}

/// What a target's goal takes with the programme's settings: its method's
/// `goal` with the programme's setting and photometry, the goal from
/// [`Settings::goal_for`] (its own, else the programme's, else its method's
/// default). `None` when the target has no method or no goal; an error is
/// kept as its message.
pub fn target_prediction(
    settings: &Settings,
    t: &Target,
) -> Option<std::result::Result<Prediction, String>> {
    target_work(settings, t, false).map(|r| r.map(|w| w.prediction))
}

/// One target's work for the budget: its prediction at its goal and, when
/// asked, its inverse curve.
#[derive(Debug, Clone, PartialEq)]
pub struct TargetWork {
    /// The method's prediction at the target's goal.
    pub prediction: Prediction,
    /// The inverse curve (empty unless asked for).
    pub curve: Vec<CurvePoint>,
}

/// [`target_prediction`] and, with `curves`, the target's inverse curve:
/// the one place a target's goal is asked (a supernova already observed has
/// none).
pub fn target_work(
    settings: &Settings,
    t: &Target,
    curves: bool,
) -> Option<std::result::Result<TargetWork, String>> {
    // A supernova already observed has nothing to plan: no goal.
    if observed_row(t).is_some() {
        return None;
    }
    let m = settings.method(t.kind)?;
    let g = settings.goal_for(t)?;
    // One goal search for the row and its curve: the work that does not
    // depend on the goal is done once (same answers as target_prediction).
    let mut search = m.goal_search();
    let tg = crate::ladder::with_goal(t, Some(g));
    let r = search
        .goal(&settings.setting(&tg), &settings.photometer, g)
        .map_err(|e| e.to_string());
    Some(r.map(|p| {
        let curve = if curves {
            curve::inverse_curve_with(settings, t, Some(&p), &mut *search)
        } else {
            Vec::new()
        };
        TargetWork {
            prediction: p,
            curve,
        }
    }))
}

/// What the target at `i` of a list takes, a field being one unit
/// (src/ladder/field.rs): a field's plan with all its stars (one row, its
/// hours counted once, its verdict); nothing for a star of a field (its
/// field's row counts it); a refused field link as the reason; any other
/// target as [`target_prediction`].
pub fn list_prediction(
    settings: &Settings,
    targets: &[Target],
    links: &crate::ladder::field::Links,
    i: usize,
) -> Option<std::result::Result<Prediction, String>> {
    use crate::ladder::field::Role;
    match links.role(i) {
        Role::Alone => target_prediction(settings, &targets[i]),
        Role::Member(_) => None,
        Role::Refused(why) => Some(Err(why.to_string())),
        Role::Field(g) => {
            let f = &targets[g.field];
            settings.goal_for(f)?;
            if g.members.is_empty() {
                return Some(Err(format!(
                    "field '{}' has no pulsators: give its stars field = {}",
                    f.name, f.name
                )));
            }
            Some(
                settings
                    .field_report(targets, g)
                    .map(|r| r.prediction)
                    .map_err(|e| e.to_string()),
            )
        }
    }
}

/// Budget every target that has a method, with the programme's settings (its
/// site, range, limits, instrument and methods; [`target_prediction`] for
/// each target, on all cores); a target without a method or a goal is
/// skipped with a reason.
pub fn budget(settings: &Settings, targets: &[Target]) -> Result<Budget> {
    budget_with(settings, targets, &Options::default())
}

/// [`budget`] with the curves and the allocation the options ask for.
pub fn budget_with(settings: &Settings, targets: &[Target], opts: &Options) -> Result<Budget> {
    settings.nights()?;
    if let Some(a) = &opts.asked {
        a.check()?;
        a.check_semesters(settings)?;
    }
    // Every target's methods ask for the range's nights: built once, in parallel.
    crate::programme::warm_nights(&settings.site, settings.from, settings.to, targets);
    let links = crate::ladder::field::link(targets);
    let curves = opts.curves || opts.asked.is_some();
    let work: Vec<_> = {
        use rayon::prelude::*;
        (0..targets.len())
            .into_par_iter()
            .map(|i| match links.role(i) {
                crate::ladder::field::Role::Alone => target_work(settings, &targets[i], curves),
                // A field's row (its curve: zero and its own plan) or a star of one.
                role => list_prediction(settings, targets, &links, i).map(|r| {
                    r.map(|p| TargetWork {
                        curve: match role {
                            crate::ladder::field::Role::Field(_) if curves => {
                                curve::field_curve(settings, &p, settings.goal_for(&targets[i]))
                            }
                            _ => Vec::new(),
                        },
                        prediction: p,
                    })
                }),
            })
            .collect()
    };
    assemble_with(settings, targets, work, opts)
}

/// The budget from each target's [`target_prediction`] (one per target, in
/// order): rows, targets skipped, totals by month and semester.
pub fn assemble(
    settings: &Settings,
    targets: &[Target],
    work: Vec<Option<std::result::Result<Prediction, String>>>,
) -> Budget {
    let work = work
        .into_iter()
        .map(|w| {
            w.map(|r| {
                r.map(|p| TargetWork {
                    prediction: p,
                    curve: Vec::new(),
                })
            })
        })
        .collect();
    // Without hours asked nothing here can fail.
    assemble_with(settings, targets, work, &Options::default())
        .unwrap_or_else(|_| unreachable_budget(settings))
}

/// The budget row of target `i` from its work (see [`assemble_with`]).
fn budget_row(
    settings: &Settings,
    targets: &[Target],
    links: &crate::ladder::field::Links,
    i: usize,
    w: TargetWork,
    clear: &[f64; 12],
    confidence: f64,
) -> BudgetRow {
    let climate = &settings.site.climate;
    let t = &targets[i];
    let goal = settings.goal_for(t).unwrap_or(f64::NAN);
    let TargetWork {
        prediction: p,
        curve,
    } = w;
    let nights = curve::epoch_nights(settings, &p);
    let mut by_month: BTreeMap<String, f64> = BTreeMap::new();
    let mut by_semester: BTreeMap<String, f64> = BTreeMap::new();
    for (d, h) in &nights {
        *by_month
            .entry(format!("{:04}-{:02}", d.year(), d.month()))
            .or_default() += h;
        *by_semester.entry(climate.semester_of(*d).0).or_default() += h;
    }
    let loads = night_loads(&nights, 0.0);
    let n = p.epochs.len();
    let exp: f64 = p.epochs.iter().map(|e| e.exptime_s).sum();
    let mut r = BudgetRow {
        target: t.name.clone(),
        kind: t.kind,
        goal_pct: goal,
        achievable_pct: p.distance_precision_pct,
        epochs: n,
        exptime_per_epoch_s: if n > 0 { exp / n as f64 } else { 0.0 },
        hours: p.hours_needed.max(0.0),
        verdict_label: p.verdict.label().to_string(),
        verdict: p.verdict.clone(),
        hours_by_month: by_month,
        notes: p.notes.clone(),
        error_terms: p.error_terms.clone(),
        priority: t.priority,
        nights: nights.len(),
        hours_by_semester: by_semester,
        hours_expected: weather::expected_hours(&loads, clear),
        hours_pessimistic: HoursDistribution::new(&loads, clear).quantile(confidence),
        exposure_s: exp,
        curve,
        epoch_nights: nights,
        members: match links.role(i) {
            crate::ladder::field::Role::Field(g) => {
                g.members.iter().map(|m| targets[*m].name.clone()).collect()
            }
            _ => Vec::new(),
        },
        limited_by: String::new(),
        limit: String::new(),
        parallax: crate::programme::parallax_fit(settings, t, &p.epochs)
            .as_ref()
            .map(ParallaxFit::from),
    };
    if !allocation::goal_reached(&r) {
        (r.limited_by, r.limit) = allocation::range_limit(&r, settings);
    }
    r
}

fn unreachable_budget(settings: &Settings) -> Budget {
    let (f, source, default_used) = clear_fraction(settings);
    Budget {
        rows: Vec::new(),
        skipped: Vec::new(),
        observed: Vec::new(),
        hours_by_month: BTreeMap::new(),
        hours_by_semester: BTreeMap::new(),
        total_hours: 0.0,
        science_hours: 0.0,
        calibration_hours: 0.0,
        science_hours_expected: 0.0,
        calibration_hours_expected: 0.0,
        site: settings.site.name.clone(),
        instrument: settings.instrument().name.clone(),
        from: settings.from,
        to: settings.to,
        weather: WeatherInfo {
            clear_fraction: f,
            source,
            default_used,
            confidence: weather::DEFAULT_CONFIDENCE,
        },
        overheads: overheads(settings, 0, 0.0, 0.0, 0.0),
        semesters: Vec::new(),
        total_hours_with_calibrations: 0.0,
        total_hours_expected: 0.0,
        total_hours_pessimistic: 0.0,
        allocation: None,
        goals_met_curve: Vec::new(),
    }
}

fn overheads(
    settings: &Settings,
    nights: usize,
    cal_h: f64,
    exposure_h: f64,
    visit_h: f64,
) -> Overheads {
    let i = settings.instrument();
    Overheads {
        instrument: i.name.clone(),
        acquisition_s: i.visit_overhead_s,
        readout_s: i.readout_s,
        filter_change_s: i.filter_change_s,
        calibration_s_per_night: i.calibration_s_per_night,
        calibration_nights: nights,
        calibration_hours: cal_h,
        exposure_hours: exposure_h,
        visit_overhead_hours: (visit_h - exposure_h).max(0.0),
    }
}

/// The site's semesters that the range touches: label, first and last day.
pub fn range_semesters(settings: &Settings) -> Vec<(String, NaiveDate, NaiveDate)> {
    let mut out = Vec::new();
    let mut d = settings.from;
    while d <= settings.to {
        let s = settings.site.climate.semester_of(d);
        d = match s.2.succ_opt() {
            Some(x) => x,
            None => {
                out.push(s);
                break;
            }
        };
        out.push(s);
    }
    out
}

/// Night loads (month, clear hours) of a set of (night, hours) pairs, each
/// night with `cal_h` of calibrations when `cal_h` > 0.
pub fn night_loads(nights: &[(NaiveDate, f64)], cal_h: f64) -> Vec<NightLoad> {
    nights
        .iter()
        .map(|(d, h)| NightLoad {
            month: d.month(),
            hours: h + cal_h,
        })
        .collect()
}

/// [`assemble`] with curves and the allocation of the hours asked.
pub fn assemble_with(
    settings: &Settings,
    targets: &[Target],
    work: Vec<Option<std::result::Result<TargetWork, String>>>,
    opts: &Options,
) -> Result<Budget> {
    let site = &settings.site;
    let climate = &site.climate;
    let links = crate::ladder::field::link(targets);
    let (clear, source, default_used) = clear_fraction(settings);
    let confidence = opts.confidence.unwrap_or(weather::DEFAULT_CONFIDENCE);
    let work: Vec<(usize, std::result::Result<TargetWork, String>)> = work
        .into_iter()
        .enumerate()
        .filter_map(|(i, w)| w.map(|w| (i, w)))
        .collect();
    // Each target's row from its work, in parallel (a row's weather
    // distribution and parallax fit are its own), then taken in target
    // order: the sums below add in the same order as one loop did.
    let built: Vec<(usize, std::result::Result<BudgetRow, String>)> = {
        use rayon::prelude::*;
        work.into_par_iter()
            .map(|(i, r)| {
                let row =
                    r.map(|w| budget_row(settings, targets, &links, i, w, &clear, confidence));
                (i, row)
            })
            .collect()
    };
    let mut rows = Vec::new();
    let mut skipped = Vec::new();
    let mut observed = Vec::new();
    let mut done = vec![false; targets.len()];
    let mut exposure_s = 0.0;
    let mut visit_s = 0.0;
    for (i, r) in built {
        done[i] = true;
        match r {
            Ok(row) => {
                exposure_s += row.exposure_s;
                visit_s += row.hours * 3600.0;
                rows.push(row);
            }
            Err(e) => skipped.push((targets[i].name.clone(), e)),
        }
    }
    for (i, t) in targets.iter().enumerate() {
        if let crate::ladder::field::Role::Member(_) = links.role(i) {
            // Counted in its field's row.
            continue;
        }
        if !done[i] {
            if let Some(o) = observed_row(t) {
                observed.push(o);
                continue;
            }
            let why = if t.kind != Kind::Field && settings.method(t.kind).is_none() {
                format!("no distance method for kind '{}'", t.kind.as_str())
            } else {
                "no goal: give the target a goal_pct or pass --goal-pct".to_string()
            };
            skipped.push((t.name.clone(), why));
        }
    }
    let mut hours_by_month: BTreeMap<String, f64> = BTreeMap::new();
    let mut hours_by_semester: BTreeMap<String, f64> = BTreeMap::new();
    for r in &rows {
        for (m, h) in &r.hours_by_month {
            *hours_by_month.entry(m.clone()).or_default() += h;
        }
        for (m, h) in &r.hours_by_semester {
            *hours_by_semester.entry(m.clone()).or_default() += h;
        }
    }
    let total_hours = rows.iter().map(|r| r.hours).sum::<f64>() + 0.0;
    // The programme's nights: every target's epochs, a calibration each.
    let cal_h = settings.instrument().calibration_s_per_night / 3600.0;
    let mut prog: BTreeMap<NaiveDate, f64> = BTreeMap::new();
    for r in &rows {
        for (d, h) in &r.epoch_nights {
            *prog.entry(*d).or_default() += h;
        }
    }
    let prog_nights: Vec<(NaiveDate, f64)> = prog.into_iter().collect();
    let loads = night_loads(&prog_nights, cal_h);
    let calibration_hours = cal_h * prog_nights.len() as f64;
    let science_hours_expected = rows.iter().map(|r| r.hours_expected).sum::<f64>() + 0.0;
    let calibration_hours_expected = weather::expected_hours(
        &night_loads(
            &prog_nights
                .iter()
                .map(|(d, _)| (*d, 0.0))
                .collect::<Vec<_>>(),
            cal_h,
        ),
        &clear,
    );
    let mut semesters: Vec<SemesterInfo> = range_semesters(settings)
        .into_iter()
        .map(|(label, from, to)| SemesterInfo {
            label,
            from,
            to,
            hours: 0.0,
            hours_expected: 0.0,
        })
        .collect();
    {
        for ((d, _), l) in prog_nights.iter().zip(&loads) {
            let label = climate.semester_of(*d).0;
            if let Some(s) = semesters.iter_mut().find(|s| s.label == label) {
                s.hours += l.hours;
                s.hours_expected += weather::expected_hours(std::slice::from_ref(l), &clear);
            }
        }
    }
    let mut b = Budget {
        total_hours_with_calibrations: total_hours + calibration_hours,
        total_hours_expected: weather::expected_hours(&loads, &clear),
        total_hours_pessimistic: HoursDistribution::new(&loads, &clear).quantile(confidence),
        overheads: overheads(
            settings,
            prog_nights.len(),
            calibration_hours,
            exposure_s / 3600.0,
            visit_s / 3600.0,
        ),
        rows,
        skipped,
        observed,
        hours_by_month,
        hours_by_semester,
        total_hours,
        science_hours: total_hours,
        calibration_hours,
        science_hours_expected,
        calibration_hours_expected,
        site: site.name.clone(),
        instrument: settings.instrument().name.clone(),
        from: settings.from,
        to: settings.to,
        weather: WeatherInfo {
            clear_fraction: clear,
            source,
            default_used,
            confidence,
        },
        semesters,
        allocation: None,
        goals_met_curve: Vec::new(),
    };
    if let Some(a) = &opts.asked {
        let a = allocation::allocate(settings, &b, a)?;
        b.goals_met_curve = a.steps.clone();
        b.allocation = Some(a);
    } else if opts.curves {
        b.goals_met_curve = allocation::goals_met_curve(settings, &b).0;
    }
    Ok(b)
}

/// The budget as Markdown tables ready for a proposal: the targets (with
/// the share of the hours asked when there is an allocation), the totals,
/// the semesters and the months.
pub fn markdown(b: &Budget) -> String {
    let q = num(b.weather.confidence * 100.0, 0);
    let alloc = b.allocation.as_ref();
    let mut s = format!(
        "| target | method | goal σd/d | achievable σd/d | epochs | exposure / epoch | hours | expected h | {q} % h | verdict |{}\n| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | --- |{}\n",
        if alloc.is_some() {
            " share h | reaches | status |"
        } else {
            ""
        },
        if alloc.is_some() {
            " ---: | ---: | --- |"
        } else {
            ""
        }
    );
    // A number without a value is an en dash, as proposals print it.
    let pct = |x: f64| fixed(x, 1).map_or("–".to_string(), |v| format!("{v} %"));
    for (i, r) in b.rows.iter().enumerate() {
        let share = alloc
            .and_then(|a| a.shares.get(i))
            .map(|sh| {
                format!(
                    " {} | {} | {} |",
                    num(sh.hours, 1),
                    pct(sh.reaches_pct),
                    sh.status.replace('_', " ")
                )
            })
            .unwrap_or_default();
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} s | {} | {} | {} | {} |{share}\n",
            md_cell(&r.target),
            r.kind.as_str(),
            pct(r.goal_pct),
            pct(r.achievable_pct),
            r.epochs,
            num(r.exptime_per_epoch_s, 0),
            num(r.hours, 1),
            num(r.hours_expected, 1),
            num(r.hours_pessimistic, 1),
            md_cell(&r.verdict.text())
        ));
    }
    // A supernova already observed: its row, no goal and no hours.
    for o in &b.observed {
        s.push_str(&format!(
            "| {} | {} | – | – | – | – | – | – | – | {} |{}\n",
            md_cell(&o.target),
            o.kind.as_str(),
            OBSERVED_VERDICT,
            if alloc.is_some() {
                " – | – | not a goal |"
            } else {
                ""
            }
        ));
    }
    // Science + calibrations = total, as every surface says it; the
    // pessimistic hours are the total's quantile (not a sum of the rows').
    let share_sum = alloc.map(|a| a.shares.iter().map(|s| s.hours).sum::<f64>());
    s.push_str(&format!(
        "| science | | | | | | {} | {} | – | |{}\n",
        num(b.science_hours, 1),
        num(b.science_hours_expected, 1),
        share_sum
            .map(|h| format!(" {} | | |", num(h, 1)))
            .unwrap_or_default()
    ));
    s.push_str(&format!(
        "| calibrations | | | | {} nights | {} s / night | {} | {} | – | |{}\n",
        b.overheads.calibration_nights,
        num(b.overheads.calibration_s_per_night, 0),
        num(b.calibration_hours, 1),
        num(b.calibration_hours_expected, 1),
        alloc
            .map(|a| format!(" {} | | |", num(a.calibration_hours, 1)))
            .unwrap_or_default()
    ));
    s.push_str(&format!(
        "| **total** | | | | | | **{}** | **{}** | **{}** | |{}\n",
        num(b.total_hours_with_calibrations, 1),
        num(b.total_hours_expected, 1),
        num(b.total_hours_pessimistic, 1),
        alloc
            .map(|a| format!(
                " **{}** | | {} of {} goals met |",
                num(a.hours_allocated, 1),
                a.goals_met,
                a.goals_total
            ))
            .unwrap_or_default()
    ));
    s.push('\n');
    for l in assumptions(b).iter().chain(totals_lines(b).iter().take(1)) {
        s.push_str(&format!("{}\n\n", md_cell(l)));
    }
    if let Some(a) = alloc {
        s.push_str(&format!(
            "Hours asked {}: {} of {} goals met (priority-weighted {} of {}), {} h allocated with {} h of calibrations, {} h left; probability that the weather lets them fit {}.\n\n",
            md_cell(&asked_words(a)),
            a.goals_met,
            a.goals_total,
            num(a.weight_met, 0),
            num(a.weight_total, 0),
            num(a.hours_allocated, 1),
            num(a.calibration_hours, 1),
            num(a.hours_left, 1),
            num(a.probability_all_met, 2)
        ));
    }
    let terms = terms_lines(b);
    if !terms.is_empty() {
        s.push_str("σd/d by term (percent, in quadrature):\n\n");
        for l in &terms {
            s.push_str(&format!("- {}\n", md_cell(l)));
        }
        s.push('\n');
    }
    if !b.semesters.is_empty() {
        s.push_str(
            "| semester | from | to | total h | expected h |\n| --- | --- | --- | ---: | ---: |\n",
        );
        for x in &b.semesters {
            s.push_str(&format!(
                "| {} | {} | {} | {} | {} |\n",
                x.label,
                x.from,
                x.to,
                num(x.hours, 1),
                num(x.hours_expected, 1)
            ));
        }
    }
    if !b.hours_by_month.is_empty() {
        s.push_str("\n| month | science h |\n| --- | ---: |\n");
        for (k, h) in &b.hours_by_month {
            s.push_str(&format!("| {k} | {} |\n", num(*h, 1)));
        }
    }
    s
}

/// A row's σ_d/d by term for a CSV field: `name=percent` pairs joined by
/// `; ` (the terms add in quadrature; the numbers of `error_terms` in
/// `--json`, three decimals).
pub fn terms_field(r: &BudgetRow) -> String {
    r.error_terms
        .iter()
        .map(|t| format!("{}={}", t.name, csv_num(t.distance_pct, 3)))
        .collect::<Vec<_>>()
        .join("; ")
}

/// The budget as CSV: one row per target (a number without a value is an
/// empty field; the share columns are empty without hours asked), each
/// with its σ_d/d by term; a supernova already observed as a row of
/// verdict `observed` and share status `not_a_goal` with its line in
/// `detail` and no goal or hours; then three rows of kind `total`: `science`,
/// `calibrations` and `total` (science + calibrations, as every surface
/// counts it; the pessimistic hours only for the total, its own quantile).
pub fn csv(b: &Budget) -> String {
    let alloc = b.allocation.as_ref();
    let mut rows: Vec<Vec<String>> = b
        .rows
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let sh = alloc.and_then(|a| a.shares.get(i));
            vec![
                r.target.clone(),
                r.kind.as_str().to_string(),
                csv_num(r.goal_pct, 3),
                csv_num(r.achievable_pct, 3),
                r.epochs.to_string(),
                csv_num(r.exptime_per_epoch_s, 1),
                csv_num(r.hours, 3),
                r.verdict_label.clone(),
                r.verdict.text(),
                csv_num(r.priority, 3),
                r.nights.to_string(),
                csv_num(r.hours_expected, 3),
                csv_num(r.hours_pessimistic, 3),
                sh.map(|s| s.status.clone()).unwrap_or_default(),
                sh.map(|s| csv_num(s.hours, 3)).unwrap_or_default(),
                sh.map(|s| csv_num(s.reaches_pct, 3)).unwrap_or_default(),
                terms_field(r),
            ]
        })
        .collect();
    // A supernova already observed: its line, verdict `observed`, no
    // goal, no hours, share status `not_a_goal`.
    for o in &b.observed {
        let mut v = vec![String::new(); 17];
        v[0] = o.target.clone();
        v[1] = o.kind.as_str().to_string();
        v[7] = "observed".into();
        v[8] = o.text.clone();
        v[13] = "not_a_goal".into();
        rows.push(v);
    }
    let sum_row = |name: &str,
                   nights: String,
                   hours: f64,
                   expected: f64,
                   pess: Option<f64>,
                   share: Option<f64>| {
        let mut v = vec![String::new(); 17];
        v[0] = name.to_string();
        v[1] = "total".to_string();
        v[6] = csv_num(hours, 3);
        v[10] = nights;
        v[11] = csv_num(expected, 3);
        v[12] = csv_num(pess, 3);
        v[14] = csv_num(share, 3);
        v
    };
    rows.push(sum_row(
        "science",
        String::new(),
        b.science_hours,
        b.science_hours_expected,
        None,
        alloc.map(|a| a.shares.iter().map(|s| s.hours).sum::<f64>()),
    ));
    rows.push(sum_row(
        "calibrations",
        b.overheads.calibration_nights.to_string(),
        b.calibration_hours,
        b.calibration_hours_expected,
        None,
        alloc.map(|a| a.calibration_hours),
    ));
    rows.push(sum_row(
        "total",
        String::new(),
        b.total_hours_with_calibrations,
        b.total_hours_expected,
        Some(b.total_hours_pessimistic),
        alloc.map(|a| a.hours_allocated),
    ));
    csv_table(
        &[
            "target",
            "kind",
            "goal_pct",
            "achievable_pct",
            "epochs",
            "exptime_per_epoch_s",
            "hours",
            "verdict",
            "detail",
            "priority",
            "nights",
            "hours_expected",
            "hours_pessimistic",
            "share_status",
            "share_hours",
            "share_reaches_pct",
            "error_terms_pct",
        ],
        rows,
    )
}

/// The clear fractions in a few words: their range over the months.
pub fn clear_words(w: &WeatherInfo) -> String {
    let lo = w
        .clear_fraction
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min);
    let hi = w
        .clear_fraction
        .iter()
        .cloned()
        .fold(f64::NEG_INFINITY, f64::max);
    if (hi - lo).abs() < 1e-9 {
        format!("clear fraction {} every month", num(lo, 2))
    } else {
        format!("clear fraction {}–{} by month", num(lo, 2), num(hi, 2))
    }
}

/// The budget's assumptions in words (weather, overheads): the lines every
/// text output and the Budget view print above the table.
pub fn assumptions(b: &Budget) -> Vec<String> {
    let o = &b.overheads;
    let filt = o
        .filter_change_s
        .map(|f| format!(", filter change {} s", num(f, 0)))
        .unwrap_or_default();
    vec![
        format!(
            "weather: {} ({}); pessimistic hours at the {} % quantile",
            clear_words(&b.weather),
            b.weather.source,
            num(b.weather.confidence * 100.0, 0)
        ),
        format!(
            "overheads ({}): acquisition {} s a visit, readout {} s an exposure{filt}, calibrations {} s a night on {} nights",
            o.instrument,
            num(o.acquisition_s, 0),
            num(o.readout_s, 0),
            num(o.calibration_s_per_night, 0),
            o.calibration_nights
        ),
    ]
}

/// A row's σ_d/d by term in words, percent with two decimals (the terms
/// add in quadrature to its `achievable_pct`; the numbers of
/// `error_terms` in `--json`); empty without terms.
pub fn terms_words(r: &BudgetRow) -> String {
    r.error_terms
        .iter()
        .map(|t| format!("{} {} %", t.name, num(t.distance_pct, 2)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Each row's σ_d/d by term, percent (the terms add in quadrature to its
/// `achievable_pct`): one line per row that has terms.
pub fn terms_lines(b: &Budget) -> Vec<String> {
    b.rows
        .iter()
        .filter(|r| !r.error_terms.is_empty())
        .map(|r| format!("{}: {}", r.target, terms_words(r)))
        .collect()
}

/// The programme's hours, one definition on every surface: science (the
/// targets' plans with their visit overheads) + calibrations = total, in
/// clear weather and expected with the weather, and the total's pessimistic
/// quantile. Short parts that a narrow window can wrap between (the Budget
/// view); [`totals_lines`] says the same at length.
pub fn total_parts(b: &Budget) -> Vec<String> {
    vec![
        format!(
            "science {} h + calibrations {} h = total {} h clear",
            num(b.science_hours, 1),
            num(b.calibration_hours, 1),
            num(b.total_hours_with_calibrations, 1)
        ),
        format!(
            "with the weather {} + {} = {} h, {} h at {} %",
            num(b.science_hours_expected, 1),
            num(b.calibration_hours_expected, 1),
            num(b.total_hours_expected, 1),
            num(b.total_hours_pessimistic, 1),
            num(b.weather.confidence * 100.0, 0)
        ),
    ]
}

/// The totals in words (science + calibrations = total; clear, expected,
/// pessimistic) and by semester (science and calibrations).
pub fn totals_lines(b: &Budget) -> Vec<String> {
    let mut out = vec![format!(
        "science {} h ({} h open shutter, {} h visit overheads) + calibrations {} h ({} s on each of {} nights) = total {} h in clear weather; with the weather {} + {} = {} h expected, {} h at the {} % quantile of the total",
        num(b.science_hours, 1),
        num(b.overheads.exposure_hours, 1),
        num(b.overheads.visit_overhead_hours, 1),
        num(b.calibration_hours, 1),
        num(b.overheads.calibration_s_per_night, 0),
        b.overheads.calibration_nights,
        num(b.total_hours_with_calibrations, 1),
        num(b.science_hours_expected, 1),
        num(b.calibration_hours_expected, 1),
        num(b.total_hours_expected, 1),
        num(b.total_hours_pessimistic, 1),
        num(b.weather.confidence * 100.0, 0)
    )];
    for s in &b.semesters {
        out.push(format!(
            "semester {} ({} to {}): total {} h clear, {} h expected",
            s.label,
            s.from,
            s.to,
            num(s.hours, 1),
            num(s.hours_expected, 1)
        ));
    }
    out
}

/// Every target's inverse curve and the programme's goals-met curve in
/// words (`rung budget --curves`): for each target the clear and expected
/// hours of each point, the σ_d/d it reaches and the marginal gain over the
/// point before; then the hours at which each further goal falls in.
pub fn curve_lines(b: &Budget) -> Vec<String> {
    let mut out = vec![
        "Inverse curves: σd/d against telescope hours (clear weather, and expected with the weather); gain: σd/d won per further clear hour, percentage points an hour".to_string(),
    ];
    for r in &b.rows {
        let pts: Vec<&CurvePoint> = r
            .curve
            .iter()
            .filter(|p| p.distance_precision_pct.is_finite())
            .collect();
        if pts.is_empty() {
            out.push(format!(
                "  {} (goal {} %): no curve ({})",
                r.target,
                num(r.goal_pct, 1),
                if r.curve.is_empty() && r.kind == Kind::Field {
                    "a field's curve is not computed".to_string()
                } else {
                    r.verdict.text()
                }
            ));
            continue;
        }
        out.push(format!(
            "  {} (goal {} %, {})",
            r.target,
            num(r.goal_pct, 1),
            r.verdict.text()
        ));
        out.push(format!(
            "    {:>8} {:>8} {:>8} {:>7} {:>10}",
            "hours", "exp h", "σd/d %", "epochs", "gain %/h"
        ));
        for p in pts {
            let mark = if p.distance_precision_pct <= r.goal_pct + 1e-9 {
                "  goal met"
            } else {
                ""
            };
            out.push(format!(
                "    {:>8} {:>8} {:>8} {:>7} {:>10}{mark}",
                num(p.hours, 2),
                num(p.hours_expected, 2),
                num(p.distance_precision_pct, 2),
                p.epochs,
                num(p.gain_pct_per_hour, 2)
            ));
        }
    }
    out.extend(steps_lines(&b.goals_met_curve));
    out
}

/// The goals-met curve in words: from how many hours each further goal
/// falls in (and the goals the best allocation drops for it).
pub fn steps_lines(steps: &[GainStep]) -> Vec<String> {
    if steps.is_empty() {
        return Vec::new();
    }
    let mut out = vec![
        "Goals met against total hours (expected with the weather, calibrations included): from"
            .to_string(),
    ];
    for s in steps {
        out.push(format!(
            "  {:>8} h  {:>3} goals (weight {})  + {}{}{}",
            num(s.hours, 1),
            s.goals_met,
            num(s.weight, 0),
            s.adds.join(", "),
            if s.drops.is_empty() {
                String::new()
            } else {
                format!(", for {}", s.drops.join(", "))
            },
            match s.hours_at_least {
                Some(l) => format!("  (not proven the fewest: at least {} h)", num(l, 1)),
                None => String::new(),
            }
        ));
    }
    if steps.iter().any(|s| s.hours_at_least.is_some()) {
        out.push(format!(
            "  Steps marked 'not proven' are allocations found by greedy searches between exact \
             steps (a programme of more than {} goals, or a search that reached its node limit); \
             the fewest hours lie between the two figures.",
            alloc::EXACT_CURVE_ITEMS
        ));
    }
    out
}

/// The hours asked in words.
pub fn asked_words(a: &Allocation) -> String {
    if let Some(n) = a.nights_asked {
        format!(
            "{} nights ({} h at {} dark hours a night)",
            num(n, 1),
            num(a.hours_asked, 1),
            num(a.hours_per_night.unwrap_or(f64::NAN), 2)
        )
    } else if !a.hours_asked_by_semester.is_empty() {
        let parts: Vec<String> = a
            .hours_asked_by_semester
            .iter()
            .map(|(k, h)| format!("{k} {} h", num(*h, 1)))
            .collect();
        format!("{} h ({})", num(a.hours_asked, 1), parts.join(", "))
    } else {
        format!("{} h", num(a.hours_asked, 1))
    }
}

/// The allocation in words: the hours asked, each target's share and what it
/// reaches, the goals met, what is left, and what more hours would buy.
pub fn allocation_lines(b: &Budget, a: &Allocation) -> Vec<String> {
    let mut out = vec![format!(
        "Hours asked: {} (expected weather; the allocation meets the most priority-weighted goals{})",
        asked_words(a),
        if a.proven_optimal {
            ", proven optimal".to_string()
        } else {
            format!(
                "; not proven optimal: a search stopped at its node limit, or a programme of \
                 more than {} goals allocated by greedy searches",
                alloc::EXACT_CURVE_ITEMS
            )
        }
    )];
    out.push(format!(
        "  {:<14} {:>4} {:>6} {:<12} {:>7} {:>9}  why",
        "target", "prio", "goal %", "status", "share h", "reaches %"
    ));
    for s in &a.shares {
        out.push(format!(
            "  {:<14} {:>4} {:>6} {:<12} {:>7} {:>9}  {}",
            s.target,
            num(s.priority, 0),
            num(s.goal_pct, 1),
            s.status,
            num(s.hours, 1),
            num(s.reaches_pct, 1),
            s.why
        ));
    }
    out.push(format!(
        "  goals met: {} of {} (priority-weighted {} of {}); {} h allocated ({} h of calibrations), {} h left",
        a.goals_met,
        a.goals_total,
        num(a.weight_met, 0),
        num(a.weight_total, 0),
        num(a.hours_allocated, 1),
        num(a.calibration_hours, 1),
        num(a.hours_left, 1)
    ));
    for (k, h) in &a.hours_left_by_semester {
        out.push(format!(
            "  semester {k}: {} h allocated of {} h, {} h left",
            num(
                a.hours_allocated_by_semester.get(k).copied().unwrap_or(0.0),
                1
            ),
            num(a.hours_asked_by_semester.get(k).copied().unwrap_or(0.0), 1),
            num(*h, 1)
        ));
    }
    out.push(format!(
        "  weather: the goals met fit the hours asked with probability {}; at the {} % quantile of each goal's hours {} goals are met (weight {})",
        num(a.probability_all_met, 2),
        num(b.weather.confidence * 100.0, 0),
        a.goals_met_pessimistic,
        num(a.weight_met_pessimistic, 0)
    ));
    match &a.next {
        Some(n) => out.push(format!(
            "  more hours: at {} h the best allocation meets {} goals (weight {}), adding {}{}",
            num(n.hours, 1),
            n.goals_met,
            num(n.weight, 0),
            n.adds.join(", "),
            if n.drops.is_empty() {
                String::new()
            } else {
                format!(" for {}", n.drops.join(", "))
            }
        )),
        None => out.push("  more hours: no further goal falls in".into()),
    }
    let unmet: Vec<&allocation::Share> = a.shares.iter().filter(|s| !s.limit.is_empty()).collect();
    if !unmet.is_empty() {
        out.push("  what stops each goal not met:".into());
        for s in unmet {
            out.push(format!("    {:<14} {}", s.target, s.limit));
        }
    }
    let steps: Vec<String> = a
        .steps
        .iter()
        .map(|s| {
            format!(
                "{} h → {} ({})",
                num(s.hours, 1),
                s.goals_met,
                num(s.weight, 0)
            )
        })
        .collect();
    if !steps.is_empty() {
        out.push(format!(
            "  goals met (weight) against hours: {}",
            steps.join(", ")
        ));
    }
    out
}
