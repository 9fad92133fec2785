//! The distance-goal budget: for each target, the method, the precision it can
//! reach, the epochs, exposures and hours it takes, and a verdict; totals by
//! month and by semester.
//!
//! Semesters follow the common practice of many observatories (common
//! practice, not a standard): A runs from 1 February to 31 July, B from
//! 1 August to 31 January; January belongs to the B semester of the year before.

use crate::error::Result;
use crate::io::targets::{Kind, Target};
use crate::ladder::{Prediction, Verdict};
use crate::output::{csv_num, csv_table, fixed, md_cell, num};
use crate::programme::Settings;
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

pub use crate::programme::check_goal;

/// What a target's goal takes with the programme's settings: its method's
/// `goal` with the programme's setting and photometry, the goal from
/// [`Settings::goal_for`] (its own, else the programme's, else its method's
/// default). `None` when the target has no method or no goal; an error is
/// kept as its message.
pub fn target_prediction(
    settings: &Settings,
    t: &Target,
) -> Option<std::result::Result<Prediction, String>> {
    let m = settings.method(t.kind)?;
    let g = settings.goal_for(t)?;
    let t = crate::ladder::with_goal(t, Some(g));
    Some(
        m.goal(&settings.setting(&t), &settings.photometer, g)
            .map_err(|e| e.to_string()),
    )
}

/// Budget every target that has a method, with the programme's settings (its
/// site, range, limits, instrument and methods; [`target_prediction`] for
/// each target, on all cores); a target without a method or a goal is
/// skipped with a reason.
pub fn budget(settings: &Settings, targets: &[Target]) -> Result<Budget> {
    crate::plan::schedule::dates(settings.from, settings.to)?;
    let work: Vec<_> = {
        use rayon::prelude::*;
        targets
            .par_iter()
            .map(|t| target_prediction(settings, t))
            .collect()
    };
    Ok(assemble(settings, targets, work))
}

/// The budget from each target's [`target_prediction`] (one per target, in
/// order): rows, targets skipped, totals by month and semester.
pub fn assemble(
    settings: &Settings,
    targets: &[Target],
    work: Vec<Option<std::result::Result<Prediction, String>>>,
) -> Budget {
    let site = &settings.site;
    let work: Vec<(usize, std::result::Result<Prediction, String>)> = work
        .into_iter()
        .enumerate()
        .filter_map(|(i, w)| w.map(|w| (i, w)))
        .collect();
    let mut rows = Vec::new();
    let mut skipped = Vec::new();
    let mut done = vec![false; targets.len()];
    for (i, r) in work {
        done[i] = true;
        let t = &targets[i];
        let goal = settings.goal_for(t).unwrap_or(f64::NAN);
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
                    hours: p.hours_needed.max(0.0),
                    verdict_label: p.verdict.label().to_string(),
                    verdict: p.verdict.clone(),
                    hours_by_month: by_month,
                    notes: p.notes.clone(),
                });
            }
            Err(e) => skipped.push((t.name.clone(), e)),
        }
    }
    for (i, t) in targets.iter().enumerate() {
        if !done[i] {
            let why = if settings.method(t.kind).is_none() {
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
            if let Ok(d) = NaiveDate::parse_from_str(&format!("{m}-01"), "%Y-%m-%d") {
                *hours_by_semester.entry(semester(d)).or_default() += h;
            }
        }
    }
    let total_hours = rows.iter().map(|r| r.hours).sum::<f64>() + 0.0;
    Budget {
        rows,
        skipped,
        hours_by_month,
        hours_by_semester,
        total_hours,
    }
}

/// The budget as a Markdown table ready for a proposal.
pub fn markdown(b: &Budget) -> String {
    let mut s = String::from(
        "| target | method | goal σd/d | achievable σd/d | epochs | exposure / epoch | hours | verdict |\n| --- | --- | ---: | ---: | ---: | ---: | ---: | --- |\n",
    );
    // A number without a value is an en dash, as proposals print it.
    let pct = |x: f64| fixed(x, 1).map_or("–".to_string(), |v| format!("{v} %"));
    for r in &b.rows {
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} s | {} | {} |\n",
            md_cell(&r.target),
            r.kind.as_str(),
            pct(r.goal_pct),
            pct(r.achievable_pct),
            r.epochs,
            num(r.exptime_per_epoch_s, 0),
            num(r.hours, 1),
            md_cell(&r.verdict.text())
        ));
    }
    s.push_str(&format!(
        "| **total** | | | | | | **{}** | |\n",
        num(b.total_hours, 1)
    ));
    if !b.hours_by_semester.is_empty() {
        s.push_str("\n| semester | hours |\n| --- | ---: |\n");
        for (k, h) in &b.hours_by_semester {
            s.push_str(&format!("| {k} | {} |\n", num(*h, 1)));
        }
    }
    if !b.hours_by_month.is_empty() {
        s.push_str("\n| month | hours |\n| --- | ---: |\n");
        for (k, h) in &b.hours_by_month {
            s.push_str(&format!("| {k} | {} |\n", num(*h, 1)));
        }
    }
    s
}

/// The budget as CSV (one row per target; a number without a value is an
/// empty field).
pub fn csv(b: &Budget) -> String {
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
        ],
        b.rows.iter().map(|r| {
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
            ]
        }),
    )
}
