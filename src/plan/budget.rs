//! The distance-goal budget: for each target, the method, the precision it can
//! reach, the epochs, exposures and hours it takes, and a verdict; totals by
//! month and by semester.
//!
//! Semesters follow the common practice of many observatories (common
//! practice, not a standard): A runs from 1 February to 31 July, B from
//! 1 August to 31 January; January belongs to the B semester of the year before.

use crate::astro::night::Limits;
use crate::astro::site::Site;
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{ExposureModel, Method, Setting, Verdict};
use chrono::{Datelike, NaiveDate};
use serde::Serialize;
use std::collections::BTreeMap;

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
    /// Hours with overheads.
    pub hours: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// Short verdict label: reachable, floor, not_observable, more_seasons.
    pub verdict_label: String,
    /// Hours by month (YYYY-MM).
    pub hours_by_month: BTreeMap<String, f64>,
    /// The method's notes.
    pub notes: Vec<String>,
}

/// The budget of a programme.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Budget {
    /// One row per target with a distance method.
    pub rows: Vec<BudgetRow>,
    /// Targets left out (no method, or the method failed), with the reason.
    pub skipped: Vec<(String, String)>,
    /// Hours by month (YYYY-MM) over all targets.
    pub hours_by_month: BTreeMap<String, f64>,
    /// Hours by semester (e.g. 2026B).
    pub hours_by_semester: BTreeMap<String, f64>,
    /// Total hours.
    pub total_hours: f64,
}

/// The semester label of a date: 2026A = Feb–Jul 2026, 2026B = Aug 2026–Jan 2027.
pub fn semester(d: NaiveDate) -> String {
    match d.month() {
        1 => format!("{}B", d.year() - 1),
        2..=7 => format!("{}A", d.year()),
        _ => format!("{}B", d.year()),
    }
}

/// The short label of a verdict.
pub fn verdict_label(v: &Verdict) -> &'static str {
    match v {
        Verdict::Reachable => "reachable",
        Verdict::LimitedByFloor { .. } => "floor",
        Verdict::NotObservable { .. } => "not_observable",
        Verdict::NeedsMoreSeasons { .. } => "more_seasons",
    }
}

/// Check a distance-precision goal in percent.
pub fn check_goal(goal_pct: f64) -> Result<f64> {
    if !goal_pct.is_finite() || goal_pct <= 0.0 || goal_pct > 100.0 {
        return Err(RungError::invalid(
            "goal",
            format!("{goal_pct} % is not a distance precision in (0, 100] %"),
        ));
    }
    Ok(goal_pct)
}

/// Budget every target that has a method. `goal_pct` applies to targets
/// without their own `goal_pct`; a target with neither is skipped with a reason.
#[allow(clippy::too_many_arguments)]
pub fn budget(
    site: &Site,
    targets: &[Target],
    methods: &[&dyn Method],
    em: &dyn ExposureModel,
    from: NaiveDate,
    to: NaiveDate,
    limits: Limits,
    goal_pct: Option<f64>,
) -> Result<Budget> {
    if let Some(g) = goal_pct {
        check_goal(g)?;
    }
    crate::plan::schedule::dates(from, to)?;
    let work: Vec<(usize, Result<crate::ladder::Prediction>)> = {
        use rayon::prelude::*;
        targets
            .par_iter()
            .enumerate()
            .filter_map(|(i, t)| {
                let m = methods.iter().find(|m| m.kind() == t.kind)?;
                let g = t.goal_pct.or(goal_pct)?;
                let s = Setting {
                    site,
                    target: t,
                    from,
                    to,
                    limits,
                };
                Some((i, m.goal(&s, em, g)))
            })
            .collect()
    };
    let mut rows = Vec::new();
    let mut skipped = Vec::new();
    let mut done = vec![false; targets.len()];
    for (i, r) in work {
        done[i] = true;
        let t = &targets[i];
        let goal = t.goal_pct.or(goal_pct).unwrap_or(f64::NAN);
        match r {
            Ok(p) => {
                let total_visit_s: f64 = p.epochs.iter().map(|e| e.visit_s).sum();
                let mut by_month: BTreeMap<String, f64> = BTreeMap::new();
                for e in &p.epochs {
                    let share = if total_visit_s > 0.0 {
                        e.visit_s / total_visit_s
                    } else {
                        0.0
                    };
                    let m = e.time.local(&site.timezone).format("%Y-%m").to_string();
                    *by_month.entry(m).or_default() += share * p.hours_needed;
                }
                let n = p.epochs.len();
                rows.push(BudgetRow {
                    target: t.name.clone(),
                    kind: t.kind,
                    goal_pct: goal,
                    achievable_pct: p.distance_precision_pct,
                    epochs: n,
                    exptime_per_epoch_s: if n > 0 {
                        p.epochs.iter().map(|e| e.exptime_s).sum::<f64>() / n as f64
                    } else {
                        0.0
                    },
                    hours: p.hours_needed,
                    verdict_label: verdict_label(&p.verdict).to_string(),
                    verdict: p.verdict.clone(),
                    hours_by_month: by_month,
                    notes: p.notes.clone(),
                });
            }
            Err(e) => skipped.push((t.name.clone(), e.to_string())),
        }
    }
    for (i, t) in targets.iter().enumerate() {
        if !done[i] {
            let why = if !methods.iter().any(|m| m.kind() == t.kind) {
                format!("no distance method for kind '{}'", t.kind.as_str())
            } else {
                "no goal: give the target a goal_pct or pass --goal".to_string()
            };
            skipped.push((t.name.clone(), why));
        }
    }
    let mut hours_by_month: BTreeMap<String, f64> = BTreeMap::new();
    let mut hours_by_semester: BTreeMap<String, f64> = BTreeMap::new();
    for r in &rows {
        for (m, h) in &r.hours_by_month {
            *hours_by_month.entry(m.clone()).or_default() += h;
            if let Ok(d) = NaiveDate::parse_from_str(&format!("{m}-01"), "%Y-%m-%d") {
                *hours_by_semester.entry(semester(d)).or_default() += h;
            }
        }
    }
    let total_hours = rows.iter().map(|r| r.hours).sum::<f64>() + 0.0;
    Ok(Budget {
        rows,
        skipped,
        hours_by_month,
        hours_by_semester,
        total_hours,
    })
}

/// The verdict in words, for tables.
pub fn verdict_text(v: &Verdict) -> String {
    match v {
        Verdict::Reachable => "reachable".into(),
        Verdict::LimitedByFloor { floor_pct } => format!("floor {floor_pct:.1} %"),
        Verdict::NotObservable { when } => match when {
            Some(w) => format!("not observable ({w})"),
            None => "not observable".into(),
        },
        Verdict::NeedsMoreSeasons { seasons } => match seasons {
            Some(n) => format!("needs {n} seasons"),
            None => "needs more seasons".into(),
        },
    }
}

/// The budget as a Markdown table ready for a proposal.
pub fn markdown(b: &Budget) -> String {
    let mut s = String::from(
        "| target | method | goal σd/d | achievable σd/d | epochs | exposure / epoch | hours | verdict |\n| --- | --- | ---: | ---: | ---: | ---: | ---: | --- |\n",
    );
    for r in &b.rows {
        s.push_str(&format!(
            "| {} | {} | {:.1} % | {:.1} % | {} | {:.0} s | {:.1} | {} |\n",
            r.target,
            r.kind.as_str(),
            r.goal_pct,
            r.achievable_pct,
            r.epochs,
            r.exptime_per_epoch_s,
            r.hours,
            verdict_text(&r.verdict)
        ));
    }
    s.push_str(&format!(
        "| **total** | | | | | | **{:.1}** | |\n",
        b.total_hours
    ));
    if !b.hours_by_semester.is_empty() {
        s.push_str("\n| semester | hours |\n| --- | ---: |\n");
        for (k, h) in &b.hours_by_semester {
            s.push_str(&format!("| {k} | {h:.1} |\n"));
        }
    }
    if !b.hours_by_month.is_empty() {
        s.push_str("\n| month | hours |\n| --- | ---: |\n");
        for (k, h) in &b.hours_by_month {
            s.push_str(&format!("| {k} | {h:.1} |\n"));
        }
    }
    s
}

/// The budget as CSV (one row per target).
pub fn csv(b: &Budget) -> String {
    let mut w = csv::Writer::from_writer(Vec::new());
    let _ = w.write_record([
        "target",
        "kind",
        "goal_pct",
        "achievable_pct",
        "epochs",
        "exptime_per_epoch_s",
        "hours",
        "verdict",
        "detail",
    ]);
    for r in &b.rows {
        let _ = w.write_record([
            r.target.clone(),
            r.kind.as_str().to_string(),
            format!("{:.3}", r.goal_pct),
            format!("{:.3}", r.achievable_pct),
            r.epochs.to_string(),
            format!("{:.1}", r.exptime_per_epoch_s),
            format!("{:.3}", r.hours),
            r.verdict_label.clone(),
            verdict_text(&r.verdict),
        ]);
    }
    String::from_utf8(w.into_inner().unwrap_or_default()).unwrap_or_default()
}
