//! The same programme budgeted on several instruments or sites side by
//! side: for each, the hours every goal needs (clear, expected, pessimistic)
//! and the goals met with the hours asked.

use super::{Budget, Options, budget_with};
use crate::error::Result;
use crate::io::targets::Target;
use crate::output::num;
use crate::programme::Settings;
use serde::Serialize;

/// One target on one configuration.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SideRow {
    /// Target name.
    pub target: String,
    /// What its method reaches at its goal, percent.
    pub achievable_pct: f64,
    /// Hours in clear weather.
    pub hours: f64,
    /// Expected hours with the weather.
    pub hours_expected: f64,
    /// Verdict label.
    pub verdict_label: String,
    /// Whether the hours asked meet its goal (when hours were asked).
    pub goal_met: Option<bool>,
}

/// One configuration's summary.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Side {
    /// Site name.
    pub site: String,
    /// Instrument name.
    pub instrument: String,
    /// Targets' hours in clear weather.
    pub total_hours: f64,
    /// With the calibrations.
    pub total_hours_with_calibrations: f64,
    /// Expected with the weather.
    pub total_hours_expected: f64,
    /// At the pessimistic quantile.
    pub total_hours_pessimistic: f64,
    /// Goals the range can reach at all.
    pub goals_reachable: usize,
    /// Goals met with the hours asked.
    pub goals_met: Option<usize>,
    /// Priority-weighted goals met with the hours asked.
    pub weight_met: Option<f64>,
    /// Hours left.
    pub hours_left: Option<f64>,
    /// Per target.
    pub rows: Vec<SideRow>,
}

impl Side {
    /// The summary of a budget.
    pub fn of(b: &Budget) -> Side {
        let a = b.allocation.as_ref();
        Side {
            site: b.site.clone(),
            instrument: b.instrument.clone(),
            total_hours: b.total_hours,
            total_hours_with_calibrations: b.total_hours_with_calibrations,
            total_hours_expected: b.total_hours_expected,
            total_hours_pessimistic: b.total_hours_pessimistic,
            goals_reachable: b
                .rows
                .iter()
                .filter(|r| r.verdict == crate::ladder::Verdict::Reachable && r.epochs > 0)
                .count(),
            goals_met: a.map(|a| a.goals_met),
            weight_met: a.map(|a| a.weight_met),
            hours_left: a.map(|a| a.hours_left),
            rows: b
                .rows
                .iter()
                .enumerate()
                .map(|(i, r)| SideRow {
                    target: r.target.clone(),
                    achievable_pct: r.achievable_pct,
                    hours: r.hours,
                    hours_expected: r.hours_expected,
                    verdict_label: r.verdict_label.clone(),
                    goal_met: a.and_then(|a| a.shares.get(i)).map(|s| s.goal_met),
                })
                .collect(),
        }
    }
}

/// Budget the programme with each of `settings` (instruments or sites).
pub fn side_by_side(
    settings: &[Settings],
    targets: &[Target],
    opts: &Options,
) -> Result<Vec<Budget>> {
    settings
        .iter()
        .map(|s| budget_with(s, targets, opts))
        .collect()
}

/// The comparison in words: one line per configuration (science hours and
/// the total with calibrations in clear weather, the total expected with the
/// weather and its pessimistic quantile), then the hours each
/// target needs on each (expected with the weather) and whether it is met.
pub fn side_lines(sides: &[Side]) -> Vec<String> {
    let mut out = vec![format!(
        "  {:<18} {:<14} {:>9} {:>8} {:>8} {:>8} {:>9} {:>9}",
        "site", "instrument", "science h", "total h", "exp h", "pess h", "reachable", "met"
    )];
    for s in sides {
        out.push(format!(
            "  {:<18} {:<14} {:>9} {:>8} {:>8} {:>8} {:>9} {:>9}",
            s.site,
            s.instrument,
            num(s.total_hours, 1),
            num(s.total_hours_with_calibrations, 1),
            num(s.total_hours_expected, 1),
            num(s.total_hours_pessimistic, 1),
            s.goals_reachable,
            s.goals_met
                .map(|m| m.to_string())
                .unwrap_or_else(|| crate::output::MISSING.to_string())
        ));
    }
    out.push(String::new());
    let mut head = format!("  {:<14}", "target (exp h)");
    for (i, _) in sides.iter().enumerate() {
        head.push_str(&format!(" {:>12}", format!("[{}]", i + 1)));
    }
    out.push(head);
    // Every target of any configuration, in the order first met.
    let mut names: Vec<&str> = Vec::new();
    for s in sides {
        for r in &s.rows {
            if !names.contains(&r.target.as_str()) {
                names.push(&r.target);
            }
        }
    }
    {
        for name in names {
            let mut l = format!("  {name:<14}");
            for s in sides {
                let cell = match s.rows.iter().find(|x| x.target == name) {
                    Some(x) if x.verdict_label == "reachable" && x.hours > 0.0 => format!(
                        "{}{}",
                        num(x.hours_expected, 1),
                        match x.goal_met {
                            Some(true) => " met",
                            Some(false) => " -",
                            None => "",
                        }
                    ),
                    Some(x) => x.verdict_label.replace('_', " "),
                    None => "skipped".to_string(),
                };
                l.push_str(&format!(" {cell:>12}"));
            }
            out.push(l);
        }
    }
    for (i, s) in sides.iter().enumerate() {
        out.push(format!("  [{}] {} at {}", i + 1, s.instrument, s.site));
    }
    out
}
