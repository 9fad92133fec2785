//! The hours asked, shared among the programme's goals: which goals they
//! meet (the exact allocation of [`super::alloc`] on the hours each goal
//! takes with the site's weather), what each target reaches with its share,
//! what is left over, and at how many hours each further goal falls in
//! (docs/science.md, Weather and allocation).

use super::alloc::{self, Capacity, Item, NightCost, Problem};
use super::weather::{HoursDistribution, NightLoad};
use super::{Budget, BudgetRow, curve};
use crate::error::{Result, RungError};
use crate::io::targets::Kind;
use crate::ladder::Verdict;
use crate::programme::Settings;
use chrono::{Datelike, NaiveDate};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// The hours asked: in total, per semester, or as a number of nights.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Asked {
    /// Hours in total over the range.
    pub hours: Option<f64>,
    /// Hours per semester, by label ("2027A"); the label `*` gives every
    /// semester of the range the same hours.
    pub hours_per_semester: BTreeMap<String, f64>,
    /// Whole nights, each worth the range's mean dark time.
    pub nights: Option<f64>,
}

/// Upper bound on the hours or nights that may be asked (a century of nights).
const MAX_ASKED_H: f64 = 1.0e6;

impl Asked {
    /// Exactly one form, with finite non-negative numbers.
    pub fn check(&self) -> Result<()> {
        let forms = self.hours.is_some() as u8
            + (!self.hours_per_semester.is_empty()) as u8
            + self.nights.is_some() as u8;
        if forms != 1 {
            return Err(RungError::invalid(
                "hours asked",
                "give one of --hours H, --hours-per-semester LABEL=H,... or --nights N",
            ));
        }
        let ok = |x: f64| x.is_finite() && (0.0..=MAX_ASKED_H).contains(&x);
        if let Some(h) = self.hours
            && !ok(h)
        {
            return Err(RungError::invalid(
                "--hours",
                format!("{h} is not a number of hours within 0..{MAX_ASKED_H}"),
            ));
        }
        if let Some(n) = self.nights
            && !ok(n)
        {
            return Err(RungError::invalid(
                "--nights",
                format!("{n} is not a number of nights within 0..{MAX_ASKED_H}"),
            ));
        }
        for (k, h) in &self.hours_per_semester {
            if !ok(*h) {
                return Err(RungError::invalid(
                    "--hours-per-semester",
                    format!("{h} for {k} is not a number of hours within 0..{MAX_ASKED_H}"),
                ));
            }
        }
        Ok(())
    }

    /// Every semester label asked per semester is one of the range's.
    pub fn check_semesters(&self, settings: &Settings) -> Result<()> {
        let labels: Vec<String> = super::range_semesters(settings)
            .into_iter()
            .map(|s| s.0)
            .collect();
        for k in self.hours_per_semester.keys() {
            if k != "*" && !labels.contains(k) {
                return Err(RungError::invalid(
                    "--hours-per-semester",
                    format!(
                        "{k} is not a semester of the range {} to {} (its semesters: {})",
                        settings.from,
                        settings.to,
                        labels.join(", ")
                    ),
                ));
            }
        }
        Ok(())
    }

    /// Parse `--hours-per-semester`: `H` (every semester) or `LABEL=H,LABEL=H`.
    pub fn parse_per_semester(text: &str) -> Result<BTreeMap<String, f64>> {
        let mut out = BTreeMap::new();
        for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            let (k, v) = match part.split_once('=') {
                Some((k, v)) => (k.trim().to_string(), v.trim()),
                None => ("*".to_string(), part),
            };
            let h: f64 = v.parse().map_err(|_| {
                RungError::parse(
                    "--hours-per-semester",
                    part,
                    "expected H or LABEL=H,LABEL=H (hours, e.g. 2027A=20)",
                )
            })?;
            if out.insert(k.clone(), h).is_some() {
                return Err(RungError::invalid(
                    "--hours-per-semester",
                    format!("{k} is given twice"),
                ));
            }
        }
        if out.is_empty() {
            return Err(RungError::parse(
                "--hours-per-semester",
                text,
                "expected H or LABEL=H,LABEL=H",
            ));
        }
        Ok(out)
    }
}

/// What a target gets from the hours asked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Share {
    /// Target name.
    pub target: String,
    /// Method.
    pub kind: Kind,
    /// Priority (the weight of its goal).
    pub priority: f64,
    /// Goal σ_d/d, percent.
    pub goal_pct: f64,
    /// `met` (its goal's hours are allocated), `partial` (leftover hours buy
    /// a precision short of the goal), `none` (no hours), `out_of_reach`
    /// (no hours reach the goal in the range).
    pub status: String,
    /// Its share of the hours asked: expected scheduled hours with the
    /// weather, calibrations of its nights not counted.
    pub hours: f64,
    /// The same share in clear weather.
    pub hours_clear: f64,
    /// The precision its share reaches, percent (`null` without hours).
    pub reaches_pct: f64,
    /// Whether its goal is met with the expected weather.
    pub goal_met: bool,
    /// Whether its goal is met in the pessimistic allocation as well.
    pub goal_met_pessimistic: bool,
    /// Expected hours its goal takes (`null` when out of reach).
    pub hours_for_goal: f64,
    /// The pessimistic quantile of the hours its goal takes.
    pub hours_for_goal_pessimistic: f64,
    /// Why, in words (the method's verdict and first note when out of reach).
    pub why: String,
    /// What stops its goal, when it is not met: `hours_asked` (the hours
    /// asked, in total, left after the goals met), `semester_hours` (a
    /// semester's hours asked), `error_term` (a term of the method's error
    /// budget sets a floor above the goal), `floor` (a floor without a named
    /// term), `range` (the range has too few seasons or nights),
    /// `visibility` (the target is not observable enough), `ephemeris` (a
    /// pulsator's ephemeris too stale to predict its phases), `priority` (a
    /// priority of 0 weighs nothing); empty when the goal is met.
    pub limited_by: String,
    /// The same in words, with its numbers (empty when the goal is met).
    pub limit: String,
}

/// One step of the goals-met curve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GainStep {
    /// Total hours (expected, with calibrations) from which these goals are met.
    pub hours: f64,
    /// Number of goals met.
    pub goals_met: usize,
    /// Priority-weighted goals met.
    pub weight: f64,
    /// Goals that fall in at this step.
    pub adds: Vec<String>,
    /// Goals the best allocation drops at this step for better ones.
    pub drops: Vec<String>,
    /// The goals met from these hours on.
    pub met: Vec<String>,
    /// For a step not proven the fewest (a large programme's steps between
    /// the hull's corners, or a search stopped at its node limit): no
    /// allocation meets this weight in fewer hours, so the fewest lie
    /// between this and `hours`. Absent for a proven step.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hours_at_least: Option<f64>,
}

/// The allocation of the hours asked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Allocation {
    /// Hours asked in total (the sum over semesters when asked per semester).
    pub hours_asked: f64,
    /// Hours asked per semester, when asked so.
    pub hours_asked_by_semester: BTreeMap<String, f64>,
    /// Nights asked, when asked so.
    pub nights_asked: Option<f64>,
    /// Mean dark hours of a night of the range (Sun below the programme's
    /// limit), when nights were asked.
    pub hours_per_night: Option<f64>,
    /// Every target's share, in the budget's order.
    pub shares: Vec<Share>,
    /// Hours allocated, expected with the weather: goals, partial shares and calibrations.
    pub hours_allocated: f64,
    /// Hours allocated by semester.
    pub hours_allocated_by_semester: BTreeMap<String, f64>,
    /// Calibration hours within the allocation (expected).
    pub calibration_hours: f64,
    /// Hours asked and not allocated.
    pub hours_left: f64,
    /// Hours left by semester (when asked per semester).
    pub hours_left_by_semester: BTreeMap<String, f64>,
    /// Goals met.
    pub goals_met: usize,
    /// Goals in the programme (every budget row).
    pub goals_total: usize,
    /// Priority-weighted goals met.
    pub weight_met: f64,
    /// Priority-weighted goals in the programme.
    pub weight_total: f64,
    /// Goals met in the pessimistic allocation (each goal's hours at the
    /// weather quantile).
    pub goals_met_pessimistic: usize,
    /// Priority-weighted goals met in the pessimistic allocation.
    pub weight_met_pessimistic: f64,
    /// Probability that the weather lets every goal met be done within the
    /// hours asked (in each semester when asked per semester).
    pub probability_all_met: f64,
    /// Whether the searches finished (the allocation is the proven optimum).
    pub proven_optimal: bool,
    /// The goals-met curve against total hours (expected weather): the
    /// hours at which each further goal falls in.
    pub steps: Vec<GainStep>,
    /// The first step beyond the hours asked: what more hours would buy.
    pub next: Option<GainStep>,
}

/// Mean dark hours per night of the range: the Sun below the programme's
/// limit, over every night from the first to the last.
pub fn mean_dark_hours(settings: &Settings) -> Result<f64> {
    let nights =
        crate::astro::night::Night::shared_range(&settings.site, settings.from, settings.to)?;
    if nights.is_empty() {
        return Ok(0.0);
    }
    let total_s: f64 = nights
        .iter()
        .map(|n| {
            n.dark_intervals(settings.limits.sun_alt_deg)
                .iter()
                .map(|(a, b)| b.seconds_since(a))
                .sum::<f64>()
        })
        .sum();
    Ok(total_s / 3600.0 / nights.len() as f64)
}

/// The problem of one budget: items (rows that reach their goal, with a
/// positive priority) with their hours per semester, and the nights they use.
struct Built {
    problem: Problem,
    /// Row index of each item.
    rows: Vec<usize>,
    /// Night dates, by night index.
    nights: Vec<NaiveDate>,
    labels: Vec<String>,
}

/// Whether a row's goal is reached in the range (a plan with epochs and hours).
pub fn goal_reached(r: &BudgetRow) -> bool {
    r.verdict == Verdict::Reachable && r.hours.is_finite() && r.epochs > 0
}

/// Build the problem; `scale(row)` multiplies a row's expected hours
/// (1 for the expected weather, the pessimistic ratio otherwise).
fn build(b: &Budget, cal_h: f64, scale: &dyn Fn(&BudgetRow) -> f64, settings: &Settings) -> Built {
    let clear = &b.weather.clear_fraction;
    let labels: Vec<String> = b.semesters.iter().map(|s| s.label.clone()).collect();
    let sem = |d: NaiveDate| -> usize {
        let l = settings.site.climate.semester_of(d).0;
        labels.iter().position(|x| *x == l).unwrap_or(0)
    };
    let mut nights: Vec<NaiveDate> = Vec::new();
    let mut night_ix: BTreeMap<NaiveDate, usize> = BTreeMap::new();
    let mut items = Vec::new();
    let mut rows = Vec::new();
    for (ri, r) in b.rows.iter().enumerate() {
        if !goal_reached(r) || r.priority.is_nan() || r.priority <= 0.0 {
            continue;
        }
        let k = scale(r);
        let mut hours = vec![0.0; labels.len().max(1)];
        let mut ns = Vec::new();
        for (d, h) in &r.epoch_nights {
            let f = clear[(d.month() - 1) as usize];
            hours[sem(*d)] += k * h / f;
            let ix = *night_ix.entry(*d).or_insert_with(|| {
                nights.push(*d);
                nights.len() - 1
            });
            ns.push(ix);
        }
        items.push(Item {
            weight: r.priority,
            hours,
            nights: ns,
        });
        rows.push(ri);
    }
    let night_costs = nights
        .iter()
        .map(|d| NightCost {
            semester: sem(*d),
            hours: cal_h / clear[(d.month() - 1) as usize],
        })
        .collect();
    Built {
        problem: Problem {
            items,
            nights: night_costs,
            semesters: labels.len().max(1),
        },
        rows,
        nights,
        labels,
    }
}

fn names(b: &Budget, built: &Built, items: &[usize]) -> Vec<String> {
    items
        .iter()
        .map(|&i| b.rows[built.rows[i]].target.clone())
        .collect()
}

/// The allocation problem of a budget as [`allocate`] solves it (expected
/// weather): its items and, for each, the index of its budget row. For
/// checking the allocation against an exhaustive search.
pub fn problem_of(settings: &Settings, b: &Budget) -> (Problem, Vec<usize>) {
    let cal_h = settings.instrument().calibration_s_per_night / 3600.0;
    let built = build(b, cal_h, &|_| 1.0, settings);
    (built.problem, built.rows)
}

/// The goals-met curve of a budget against total hours (expected weather,
/// calibrations included): the hours at which each further goal falls in,
/// whatever the hours asked; and whether every search finished.
pub fn goals_met_curve(settings: &Settings, b: &Budget) -> (Vec<GainStep>, bool) {
    let cal_h = settings.instrument().calibration_s_per_night / 3600.0;
    let built = build(b, cal_h, &|_| 1.0, settings);
    curve_of(b, &built, alloc::steps(&built.problem))
}

/// The budget's names on the steps `curve` of `built`'s problem.
fn curve_of(b: &Budget, built: &Built, curve: Vec<alloc::Step>) -> (Vec<GainStep>, bool) {
    let mut steps: Vec<GainStep> = Vec::new();
    let mut prev: BTreeSet<usize> = BTreeSet::new();
    let mut proven = true;
    for s in curve {
        proven &= s.proven_optimal;
        let now: BTreeSet<usize> = s.items.iter().copied().collect();
        let adds: Vec<usize> = now.difference(&prev).copied().collect();
        let drops: Vec<usize> = prev.difference(&now).copied().collect();
        steps.push(GainStep {
            hours: s.hours,
            goals_met: now.len(),
            weight: s.weight,
            adds: names(b, built, &adds),
            drops: names(b, built, &drops),
            met: names(b, built, &s.items),
            hours_at_least: (!s.proven_optimal).then_some(s.hours_at_least),
        });
        prev = now;
    }
    (steps, proven)
}

/// Share the hours asked among the budget's goals (see the module documentation).
pub fn allocate(settings: &Settings, b: &Budget, asked: &Asked) -> Result<Allocation> {
    asked.check()?;
    let clear = b.weather.clear_fraction;
    let cal_h = settings.instrument().calibration_s_per_night / 3600.0;
    let built = build(b, cal_h, &|_| 1.0, settings);
    let labels = &built.labels;
    // The capacity.
    let mut hours_per_night = None;
    let (cap, hours_asked, by_sem) = if let Some(h) = asked.hours {
        (Capacity::Total(h), h, BTreeMap::new())
    } else if let Some(n) = asked.nights {
        let hpn = mean_dark_hours(settings)?;
        hours_per_night = Some(hpn);
        (Capacity::Total(n * hpn), n * hpn, BTreeMap::new())
    } else {
        asked.check_semesters(settings)?;
        let every = asked.hours_per_semester.get("*").copied();
        let caps: Vec<f64> = labels
            .iter()
            .map(|l| {
                asked
                    .hours_per_semester
                    .get(l)
                    .copied()
                    .or(every)
                    .unwrap_or(0.0)
            })
            .collect();
        let by: BTreeMap<String, f64> = labels.iter().cloned().zip(caps.iter().copied()).collect();
        (Capacity::PerSemester(caps.clone()), caps.iter().sum(), by)
    };
    // The goals-met curve once: a large programme's allocation starts from it.
    let curve = alloc::steps(&built.problem);
    let choice = alloc::allocate_along(&built.problem, &cap, &curve);
    // The pessimistic allocation: each goal at its weather quantile.
    let pess = build(
        b,
        cal_h,
        &|r: &BudgetRow| {
            if r.hours_expected > 0.0 {
                r.hours_pessimistic / r.hours_expected
            } else {
                1.0
            }
        },
        settings,
    );
    let pchoice = alloc::allocate(&pess.problem, &cap);
    let pess_met: BTreeSet<usize> = pchoice.items.iter().map(|&i| pess.rows[i]).collect();
    let met: BTreeSet<usize> = choice.items.iter().map(|&i| built.rows[i]).collect();

    // Hours used so far, by semester, and the nights in use.
    let nsem = labels.len().max(1);
    let mut used = choice.hours_by_semester.clone();
    used.resize(nsem, 0.0);
    let mut nights_used: BTreeSet<NaiveDate> = choice
        .items
        .iter()
        .flat_map(|&i| {
            built.problem.items[i]
                .nights
                .iter()
                .map(|&n| built.nights[n])
        })
        .collect();
    let sem_of = |d: NaiveDate| -> usize {
        let l = settings.site.climate.semester_of(d).0;
        labels.iter().position(|x| *x == l).unwrap_or(0)
    };
    let fits = |used: &[f64]| match &cap {
        Capacity::Total(h) => used.iter().sum::<f64>() <= h + 1e-9,
        Capacity::PerSemester(hs) => used.iter().zip(hs).all(|(u, h)| *u <= h + 1e-9),
    };
    let f_of = |d: &NaiveDate| clear[(d.month() - 1) as usize];
    // What the goals met leave, by semester (before any partial share), and
    // the nights they use: what an unmet goal is measured against.
    let left_after_met: Vec<f64> = match &cap {
        Capacity::Total(h) => vec![h - used.iter().sum::<f64>()],
        Capacity::PerSemester(hs) => hs.iter().zip(&used).map(|(h, u)| h - u).collect(),
    };
    let nights_of_met = nights_used.clone();
    // The hours a goal would add to the goals met, by semester: its own
    // expected hours and the calibrations of its nights not yet used.
    let goal_adds = |r: &BudgetRow| -> Vec<f64> {
        let mut add = vec![0.0; nsem];
        for (d, h) in &r.epoch_nights {
            add[sem_of(*d)] += h / f_of(d);
        }
        let mut ns: BTreeSet<NaiveDate> = BTreeSet::new();
        for (d, _) in &r.epoch_nights {
            if !nights_of_met.contains(d) && ns.insert(*d) {
                add[sem_of(*d)] += cal_h / f_of(d);
            }
        }
        add
    };
    // Partial shares from the leftover: unmet targets by priority, each the
    // finest point of its curve that still fits (its nights' calibrations included).
    let mut partial: BTreeMap<usize, (f64, f64, f64)> = BTreeMap::new(); // row -> (pct, hours exp, hours clear)
    let mut order: Vec<usize> = (0..b.rows.len()).filter(|i| !met.contains(i)).collect();
    order.sort_by(|a, c| {
        b.rows[*c]
            .priority
            .total_cmp(&b.rows[*a].priority)
            .then(a.cmp(c))
    });
    for ri in order {
        let r = &b.rows[ri];
        if r.priority.is_nan() || r.priority <= 0.0 {
            continue;
        }
        let mut best: Option<(f64, Vec<f64>, f64, f64)> = None;
        for p in &r.curve {
            if !p.distance_precision_pct.is_finite()
                || p.nights.is_empty()
                || p.distance_precision_pct <= r.goal_pct
            {
                continue;
            }
            let mut add = vec![0.0; nsem];
            let mut own = 0.0;
            for (d, h) in &p.nights {
                let e = h / f_of(d);
                add[sem_of(*d)] += e;
                own += e;
                if !nights_used.contains(d) {
                    add[sem_of(*d)] += cal_h / f_of(d);
                }
            }
            let trial: Vec<f64> = used.iter().zip(&add).map(|(u, a)| u + a).collect();
            if fits(&trial) && best.as_ref().is_none_or(|b| p.distance_precision_pct < b.0) {
                best = Some((p.distance_precision_pct, add, own, p.hours));
            }
        }
        if let Some((pct, add, own, clear_h)) = best {
            for (u, a) in used.iter_mut().zip(&add) {
                *u += a;
            }
            let pt = r
                .curve
                .iter()
                .find(|p| p.distance_precision_pct == pct)
                .map(|p| p.nights.clone())
                .unwrap_or_default();
            nights_used.extend(pt.iter().map(|x| x.0));
            partial.insert(ri, (pct, own, clear_h));
        }
    }
    let calibration_hours: f64 = nights_used.iter().map(|d| cal_h / f_of(d)).sum();
    let hours_allocated: f64 = used.iter().sum();
    // Probability that the weather lets the goals met be done in the hours asked.
    let mut loads_by_sem: Vec<Vec<NightLoad>> = vec![Vec::new(); nsem];
    {
        let mut per_night: BTreeMap<NaiveDate, f64> = BTreeMap::new();
        for &ri in &met {
            for (d, h) in &b.rows[ri].epoch_nights {
                *per_night.entry(*d).or_default() += h;
            }
        }
        for (d, h) in per_night {
            loads_by_sem[sem_of(d)].push(NightLoad {
                month: d.month(),
                hours: h + cal_h,
            });
        }
    }
    let probability_all_met = match &cap {
        Capacity::Total(h) => {
            let all: Vec<NightLoad> = loads_by_sem.concat();
            HoursDistribution::new(&all, &clear).probability_within(*h)
        }
        Capacity::PerSemester(hs) => loads_by_sem
            .iter()
            .zip(hs)
            .map(|(l, h)| HoursDistribution::new(l, &clear).probability_within(*h))
            .product(),
    };
    let shares: Vec<Share> = b
        .rows
        .iter()
        .enumerate()
        .map(|(ri, r)| {
            let reach = goal_reached(r);
            let (status, hours, hours_clear, reaches) = if met.contains(&ri) {
                ("met", r.hours_expected, r.hours, r.achievable_pct)
            } else if let Some((pct, h, hc)) = partial.get(&ri) {
                ("partial", *h, *hc, *pct)
            } else if reach {
                ("none", 0.0, 0.0, f64::NAN)
            } else {
                ("out_of_reach", 0.0, 0.0, f64::NAN)
            };
            let why = why(r, status, reach, hours, reaches, &b.weather);
            let (limited_by, limit) = if status == "met" {
                (String::new(), String::new())
            } else if r.priority.is_nan() || r.priority <= 0.0 {
                (
                    "priority".to_string(),
                    "its priority 0: its goal weighs nothing in the allocation".to_string(),
                )
            } else if reach {
                hours_limit(&goal_adds(r), &left_after_met, labels, &cap)
            } else {
                (r.limited_by.clone(), r.limit.clone())
            };
            Share {
                target: r.target.clone(),
                kind: r.kind,
                priority: r.priority,
                goal_pct: r.goal_pct,
                status: status.to_string(),
                hours,
                hours_clear,
                reaches_pct: reaches,
                goal_met: status == "met",
                goal_met_pessimistic: pess_met.contains(&ri),
                hours_for_goal: if reach { r.hours_expected } else { f64::NAN },
                hours_for_goal_pessimistic: if reach { r.hours_pessimistic } else { f64::NAN },
                why,
                limited_by,
                limit,
            }
        })
        .collect();
    // The goals-met curve against total hours.
    let (steps, steps_proven) = curve_of(b, &built, curve);
    let proven = choice.proven_optimal && pchoice.proven_optimal && steps_proven;
    let next = steps
        .iter()
        .find(|s| s.weight > choice.weight + 1e-9)
        .cloned();
    let hours_allocated_by_semester: BTreeMap<String, f64> =
        labels.iter().cloned().zip(used.iter().copied()).collect();
    let hours_left_by_semester: BTreeMap<String, f64> = by_sem
        .iter()
        .map(|(k, h)| {
            let u = hours_allocated_by_semester.get(k).copied().unwrap_or(0.0);
            (k.clone(), (h - u).max(0.0))
        })
        .collect();
    Ok(Allocation {
        hours_asked,
        hours_asked_by_semester: by_sem,
        nights_asked: asked.nights,
        hours_per_night,
        goals_met: met.len(),
        goals_total: b.rows.len(),
        weight_met: choice.weight,
        weight_total: b.rows.iter().map(|r| r.priority.max(0.0)).sum(),
        goals_met_pessimistic: pess_met.len(),
        weight_met_pessimistic: pchoice.weight,
        probability_all_met,
        proven_optimal: proven,
        hours_left: (hours_asked - hours_allocated).max(0.0),
        hours_allocated,
        hours_allocated_by_semester,
        hours_left_by_semester,
        calibration_hours,
        shares,
        steps,
        next,
    })
}

/// What the hours asked leave a goal that is reachable but not met: the
/// total (or the semesters) where its hours exceed what the goals met leave.
fn hours_limit(add: &[f64], left: &[f64], labels: &[String], cap: &Capacity) -> (String, String) {
    let n = crate::output::num;
    match cap {
        Capacity::Total(_) => (
            "hours_asked".to_string(),
            format!(
                "the hours asked: its goal takes {} h expected (its nights' calibrations included), the goals met leave {} h",
                n(add.iter().sum::<f64>(), 1),
                n(left.first().copied().unwrap_or(0.0).max(0.0), 1)
            ),
        ),
        Capacity::PerSemester(_) => {
            let short: Vec<String> = add
                .iter()
                .zip(left)
                .zip(labels)
                .filter(|((a, l), _)| **a > **l + 1e-9)
                .map(|((a, l), k)| {
                    format!(
                        "{k}: its goal takes {} h expected, the goals met leave {} h",
                        n(*a, 1),
                        n(l.max(0.0), 1)
                    )
                })
                .collect();
            (
                "semester_hours".to_string(),
                format!("the hours asked by semester ({})", short.join("; ")),
            )
        }
    }
}

/// What the range or the method leaves a goal out of reach, as a label and
/// in words (see [`Share::limited_by`]): the error term that sets the floor,
/// the seasons the range lacks, or the visibility.
pub fn range_limit(r: &BudgetRow, settings: &Settings) -> (String, String) {
    let n = crate::output::num;
    match &r.verdict {
        Verdict::LimitedByFloor { floor_pct } => {
            let top = r
                .error_terms
                .iter()
                .filter(|t| t.distance_pct.is_finite())
                .max_by(|a, b| a.distance_pct.total_cmp(&b.distance_pct));
            match top {
                Some(t) => (
                    "error_term".to_string(),
                    format!(
                        "the error term '{}', {} % alone, of the floor {} % (goal {} %){}",
                        t.name,
                        n(t.distance_pct, 1),
                        n(*floor_pct, 1),
                        n(r.goal_pct, 1),
                        if t.shared {
                            "; shared, it does not average down"
                        } else {
                            ""
                        }
                    ),
                ),
                None => (
                    "floor".to_string(),
                    format!(
                        "the method's floor {} % (goal {} %)",
                        n(*floor_pct, 1),
                        n(r.goal_pct, 1)
                    ),
                ),
            }
        }
        Verdict::NotObservable { .. } => (
            "visibility".to_string(),
            format!("the visibility: {}", r.verdict.text()),
        ),
        Verdict::NeedsMoreSeasons { .. } => (
            "range".to_string(),
            format!(
                "the range {} to {}: {}",
                settings.from,
                settings.to,
                r.verdict.text()
            ),
        ),
        // The phases cannot be predicted until the ephemeris is refreshed.
        Verdict::StaleEphemeris { .. } => (
            "ephemeris".to_string(),
            format!("the ephemeris: {}", r.verdict.text()),
        ),
        // Reachable in words but without a plan (no epochs or hours).
        Verdict::Reachable => (
            "range".to_string(),
            format!(
                "the range {} to {}: no epochs planned",
                settings.from, settings.to
            ),
        ),
    }
}

/// A share's reason in words.
fn why(
    r: &BudgetRow,
    status: &str,
    reach: bool,
    hours: f64,
    reaches: f64,
    w: &super::WeatherInfo,
) -> String {
    let n = crate::output::num;
    match status {
        "met" => format!(
            "goal {} % met: {} % with {} h expected ({} h in clear weather, {} h at the {} % weather quantile)",
            n(r.goal_pct, 1),
            n(r.achievable_pct, 1),
            n(r.hours_expected, 1),
            n(r.hours, 1),
            n(r.hours_pessimistic, 1),
            n(w.confidence * 100.0, 0)
        ),
        "partial" if reach => format!(
            "goal {} % not met: its goal takes {} h expected; the {} h left over reach {} %",
            n(r.goal_pct, 1),
            n(r.hours_expected, 1),
            n(hours, 1),
            n(reaches, 1)
        ),
        "partial" => format!(
            "goal {} % out of reach in the range ({}); the {} h left over reach {} %",
            n(r.goal_pct, 1),
            r.verdict.text(),
            n(hours, 1),
            n(reaches, 1)
        ),
        _ if reach => format!(
            "goal {} % not met: it takes {} h expected, and the hours asked meet more priority-weighted goals without it",
            n(r.goal_pct, 1),
            n(r.hours_expected, 1)
        ),
        _ => {
            let note = r
                .notes
                .first()
                .map(|s| format!(": {s}"))
                .unwrap_or_default();
            format!(
                "goal {} % out of reach in the range ({}){note}",
                n(r.goal_pct, 1),
                r.verdict.text()
            )
        }
    }
}

/// The curve module's best point within a share, re-exported for views.
pub use curve::best_within;
