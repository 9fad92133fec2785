//! Proposal outputs from a budget: a LaTeX table (the Markdown one is
//! [`super::markdown`]) and a short technical-justification paragraph
//! written from the budget's numbers only, so every number it names is one
//! the budget's JSON holds (rounded as printed).

use super::{Budget, asked_words, clear_words};
use crate::output::num;

/// Text for LaTeX: the special characters escaped, controls dropped.
pub fn tex(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '\\' => o.push_str("\\textbackslash{}"),
            '&' | '%' | '$' | '#' | '_' | '{' | '}' => {
                o.push('\\');
                o.push(c);
            }
            '~' => o.push_str("\\textasciitilde{}"),
            '^' => o.push_str("\\textasciicircum{}"),
            '–' => o.push_str("--"),
            'σ' => o.push_str("$\\sigma$"),
            c if c.is_control() => o.push(' '),
            c => o.push(c),
        }
    }
    o
}

/// The budget as a LaTeX table (`table` with `tabular`, booktabs rules):
/// one row per target with its goal, what it reaches, epochs, hours in
/// clear weather, expected and pessimistic, the verdict and, with hours
/// asked, its share; the totals below.
pub fn latex(b: &Budget) -> String {
    let q = num(b.weather.confidence * 100.0, 0);
    let alloc = b.allocation.as_ref();
    let pct = |x: f64| {
        if x.is_finite() {
            format!("{}\\,\\%", num(x, 1))
        } else {
            "--".to_string()
        }
    };
    let mut s = String::new();
    s.push_str(
        "% rung budget: needs \\usepackage{booktabs}\n\\begin{table}\n\\centering\n\\small\n",
    );
    s.push_str(&format!(
        "\\caption{{Distance goals and telescope hours, {} with {}, {} to {} ({}; hours with overheads).}}\n",
        tex(&b.site),
        tex(&b.instrument),
        b.from,
        b.to,
        tex(&clear_words(&b.weather))
    ));
    let cols = if alloc.is_some() {
        "llrrrrrrlrl"
    } else {
        "llrrrrrrl"
    };
    s.push_str(&format!("\\begin{{tabular}}{{{cols}}}\n\\toprule\n"));
    s.push_str(&format!(
        "target & method & goal & reaches & epochs & hours & expected & {q}\\,\\% & verdict{} \\\\\n\\midrule\n",
        if alloc.is_some() { " & share (h) & status" } else { "" }
    ));
    for (i, r) in b.rows.iter().enumerate() {
        let share = alloc
            .and_then(|a| a.shares.get(i))
            .map(|sh| {
                format!(
                    " & {} & {}",
                    num(sh.hours, 1),
                    tex(&sh.status.replace('_', " "))
                )
            })
            .unwrap_or_default();
        s.push_str(&format!(
            "{} & {} & {} & {} & {} & {} & {} & {} & {}{share} \\\\\n",
            tex(&r.target),
            r.kind.as_str(),
            pct(r.goal_pct),
            pct(r.achievable_pct),
            r.epochs,
            num(r.hours, 1),
            num(r.hours_expected, 1),
            num(r.hours_pessimistic, 1),
            tex(&r.verdict.text())
        ));
    }
    for o in &b.observed {
        s.push_str(&format!(
            "{} & {} & -- & -- & -- & -- & -- & -- & {}{} \\\\\n",
            tex(&o.target),
            o.kind.as_str(),
            tex(super::OBSERVED_VERDICT),
            if alloc.is_some() {
                " & -- & not a goal"
            } else {
                ""
            }
        ));
    }
    s.push_str("\\midrule\n");
    // Science + calibrations = total, as every surface counts it; the
    // pessimistic hours are the total's own quantile.
    let tail = |share: Option<f64>| match (alloc, share) {
        (Some(_), Some(h)) => format!(" & {} &", num(h, 1)),
        _ => String::new(),
    };
    s.push_str(&format!(
        "science & & & & & {} & {} & -- & {} \\\\\n",
        num(b.science_hours, 1),
        num(b.science_hours_expected, 1),
        tail(alloc.map(|a| a.shares.iter().map(|x| x.hours).sum::<f64>()))
    ));
    s.push_str(&format!(
        "calibrations & & & & {} nights & {} & {} & -- & {} \\\\\n",
        b.overheads.calibration_nights,
        num(b.calibration_hours, 1),
        num(b.calibration_hours_expected, 1),
        tail(alloc.map(|a| a.calibration_hours))
    ));
    s.push_str(&format!(
        "total & & & & & {} & {} & {} & {} \\\\\n",
        num(b.total_hours_with_calibrations, 1),
        num(b.total_hours_expected, 1),
        num(b.total_hours_pessimistic, 1),
        tail(alloc.map(|a| a.hours_allocated))
    ));
    s.push_str("\\bottomrule\n\\end{tabular}\n\\end{table}\n");
    s
}

/// A short technical justification from the budget's numbers: site,
/// instrument, weather assumption, hours, which goals fit and why the others
/// do not. Every number in it is one the budget's JSON holds, rounded as
/// shown (`tests/budget_outputs.rs` checks it).
pub fn justification(b: &Budget) -> String {
    let w = &b.weather;
    let q = num(w.confidence * 100.0, 0);
    let mut p = format!(
        "The programme is planned for the {} at {} from {} to {}. The site's weather is taken as a {} ({}), each night lost to cloud being repeated on a later night; calibrations take {} s on each of the {} nights observed, acquisition {} s a visit and readout {} s an exposure. ",
        b.instrument,
        b.site,
        b.from,
        b.to,
        clear_words(w),
        w.source,
        num(b.overheads.calibration_s_per_night, 0),
        b.overheads.calibration_nights,
        num(b.overheads.acquisition_s, 0),
        num(b.overheads.readout_s, 0),
    );
    p.push_str(&format!(
        "The plans of all {} targets take {} h of telescope time in clear weather with the calibrations, {} h expected with the weather and {} h at the {} % quantile. ",
        b.rows.len(),
        num(b.total_hours_with_calibrations, 1),
        num(b.total_hours_expected, 1),
        num(b.total_hours_pessimistic, 1),
        q
    ));
    if !b.observed.is_empty() {
        let names: Vec<&str> = b.observed.iter().map(|o| o.target.as_str()).collect();
        p.push_str(&format!(
            "{} {} observed already and {} the distance ladder with {} measured peak{}; nothing is planned for {} and {} not counted among the goals. ",
            names.join(", "),
            if names.len() == 1 { "is" } else { "are" },
            if names.len() == 1 { "serves" } else { "serve" },
            if names.len() == 1 { "its" } else { "their" },
            if names.len() == 1 { "" } else { "s" },
            if names.len() == 1 { "it" } else { "them" },
            if names.len() == 1 { "it is" } else { "they are" },
        ));
    }
    let Some(a) = &b.allocation else {
        return p.trim_end().to_string();
    };
    let met: Vec<String> = a
        .shares
        .iter()
        .filter(|s| s.goal_met)
        .map(|s| {
            format!(
                "{} ({} % for {} %)",
                s.target,
                num(s.reaches_pct, 1),
                num(s.goal_pct, 1)
            )
        })
        .collect();
    p.push_str(&format!(
        "With the {} asked, {} of the {} distance goals are met, chosen to meet the most goals weighted by priority ({} of {}): {}. ",
        asked_words(a),
        a.goals_met,
        a.goals_total,
        num(a.weight_met, 0),
        num(a.weight_total, 0),
        if met.is_empty() { "none".to_string() } else { met.join(", ") }
    ));
    p.push_str(&format!(
        "The allocation uses {} h, {} h of them calibrations (hours the goals met leave go to the other targets' precision), and leaves {} h; the weather lets the goals met fit with probability {}, and at the {} % quantile of each goal's hours {} goals are met. ",
        num(a.hours_allocated, 1),
        num(a.calibration_hours, 1),
        num(a.hours_left, 1),
        num(a.probability_all_met, 2),
        q,
        a.goals_met_pessimistic
    ));
    let out: Vec<String> = a
        .shares
        .iter()
        .filter(|s| !s.goal_met && !s.hours_for_goal.is_finite())
        .map(|s| {
            let r = b.rows.iter().find(|r| r.target == s.target);
            format!(
                "{}: {}",
                s.target,
                r.map(|r| r.verdict.text()).unwrap_or_default()
            )
        })
        .collect();
    if !out.is_empty() {
        p.push_str(&format!(
            "Within the range no number of hours reaches the goals of {}. ",
            out.join("; ")
        ));
    }
    let wait: Vec<String> = a
        .shares
        .iter()
        .filter(|s| !s.goal_met && s.hours_for_goal.is_finite())
        .map(|s| format!("{} ({} h)", s.target, num(s.hours_for_goal, 1)))
        .collect();
    if !wait.is_empty() {
        p.push_str(&format!(
            "The goals of {} would need more hours than are left",
            wait.join(", ")
        ));
        match &a.next {
            Some(n) => p.push_str(&format!(
                "; at {} h the best allocation would meet {} goals.",
                num(n.hours, 1),
                n.goals_met
            )),
            None => p.push('.'),
        }
    }
    p.trim_end().to_string()
}
