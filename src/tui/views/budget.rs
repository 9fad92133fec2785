//! Budget: every target's distance goal against what its method reaches
//! over the programme's range, the epochs and hours it takes in clear weather
//! and with the site's weather, and, with hours asked (`b`), the allocation:
//! each target's share and what it reaches, the goals met, the hours left
//! and what more hours buy; the selected target's reason below (from
//! `plan::budget`, as `rung budget`). Also the request form and the list of
//! files an export wrote.

use crate::plan::budget::allocation::Share;
use crate::tui::ask::{AskForm, FIELDS};
use crate::tui::keymap::Action;
use crate::tui::keymap::{Scope, keys_for};
use crate::tui::state::{State, scroll_offset};
use crate::tui::theme::kind_glyph;
use crate::tui::views::fmt::{centered, fit, fit_end, goal, note_lines, put, rfit};
use crate::tui::views::overlays::{frame, text_window};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// A share's status in a few words (the verdict column's tail).
fn status(sh: &Share) -> String {
    match sh.status.as_str() {
        "met" => "met".into(),
        "partial" => format!("partial {}%", crate::output::num(sh.reaches_pct, 1)),
        "none" => "no hours".into(),
        // The verdict already says why.
        _ => String::new(),
    }
}

pub use super::fmt::wrap;

/// Draw the Budget view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    let Some(b) = super::programme_view(
        s,
        area,
        buf,
        "Budget",
        8,
        "computing each target's goal (this takes a while for parallaxes)…",
        s.budget_now(),
        "budget not computed",
    ) else {
        return;
    };
    let n = crate::output::num;
    let q = n(b.weather.confidence * 100.0, 0);
    // The request and what it buys: whole parts, wrapped between them (two
    // lines, three on a tall window), as the totals are.
    let head_parts: Vec<String> = match &b.allocation {
        Some(a) => vec![
            format!(
                "{} h asked: {}/{} goals met (weight {}/{})",
                n(a.hours_asked, 1),
                a.goals_met,
                a.goals_total,
                n(a.weight_met, 0),
                n(a.weight_total, 0)
            ),
            format!("{} h left", n(a.hours_left, 1)),
            format!("weather p {}", n(a.probability_all_met, 2)),
            match &a.next {
                Some(x) => format!("at {} h + {}", n(x.hours, 1), x.adds.join(", ")),
                None => "no further goal with more hours".into(),
            },
        ],
        None => vec![
            format!(
                "no hours asked ({} sets them)",
                keys_for(Scope::Main, Action::BudgetAsk)
            ),
            format!(
                "total {} h with the weather ({} h at {q} %)",
                n(b.total_hours_expected, 1),
                n(b.total_hours_pessimistic, 1)
            ),
        ],
    };
    let head = pack(
        head_parts,
        area.width as usize,
        if area.height >= 30 { 3 } else { 2 },
        " · ",
    );
    for (k, l) in head.iter().enumerate() {
        put(buf, area.x, area.y + 1 + k as u16, l, area.width, th.text());
    }
    // Title and request lines above the table's header.
    let top = 1 + head.len().max(1) as u16;
    // Columns: all at 100 cells and more; without epochs and exposure below.
    let wide = area.width >= 100;
    let fixed: Vec<(&str, usize, bool)> = [
        ("target", 15, false),
        ("goal", 5, true),
        ("reach", 6, true),
        ("epochs", 6, true),
        ("exp s", 6, true),
        ("hours", 6, true),
        ("wthr h", 6, true),
        ("share", 6, true),
    ]
    .into_iter()
    .filter(|c| wide || !matches!(c.0, "epochs" | "exp s"))
    .collect();
    let used: usize = fixed.iter().map(|c| c.1 + 1).sum();
    // The verdict takes the rest of the line (at least 16 cells).
    let verdict_w = (area.width as usize).saturating_sub(used).max(16);
    let mut cols = fixed.clone();
    cols.push(("verdict", verdict_w, false));
    let line = |v: &[String]| -> String {
        v.iter()
            .zip(cols.iter())
            .map(|(t, (_, w, r))| if *r { rfit(t, *w) } else { fit(t, *w) })
            .collect::<Vec<_>>()
            .join(" ")
    };
    let header: Vec<String> = cols.iter().map(|c| c.0.to_string()).collect();
    put(
        buf,
        area.x,
        area.y + top,
        &line(&header),
        area.width,
        th.header(),
    );
    // The selected target's reason takes two lines, four on a tall window;
    // its σd/d by term three, two on a wide window (each term whole, the
    // numbers of `error_terms` in `--json`); the totals two, three on a tall window (whole parts,
    // wrapped between them); the keys one.
    let tall = area.height >= 30;
    let reason_lines: u16 = if tall { 4 } else { 2 };
    let totals = totals_lines(b, area.width as usize, if tall { 3 } else { 2 });
    let sel_name = s.selected().map(|t| t.name.clone());
    let sel_row = sel_name
        .as_ref()
        .and_then(|name| b.rows.iter().position(|r| &r.target == name));
    let terms_lines: u16 = if area.width >= 120 { 2 } else { 3 };
    let terms: Vec<String> = match sel_row.map(|i| &b.rows[i]) {
        Some(r) if !r.error_terms.is_empty() => {
            let mut parts = vec![format!("σd/d by term: {}", terms_part(&r.error_terms[0]))];
            parts.extend(r.error_terms.iter().skip(1).map(terms_part));
            pack(parts, area.width as usize, terms_lines as usize, ", ")
        }
        _ => Vec::new(),
    };
    let foot = reason_lines + terms_lines + totals.len() as u16 + 1;
    let rows = area.height.saturating_sub(top + 1 + foot) as usize;
    // The selected target's row stays in view.
    let sel_idx = sel_name
        .as_ref()
        .and_then(|n| b.rows.iter().position(|r| &r.target == n))
        .unwrap_or(0);
    let off = scroll_offset(sel_idx, rows);
    let share_of = |i: usize| b.allocation.as_ref().and_then(|a| a.shares.get(i));
    for (k, (i, r)) in b.rows.iter().enumerate().skip(off).take(rows).enumerate() {
        let y = area.y + top + 1 + k as u16;
        let sh = share_of(i);
        let verdict = match sh {
            Some(sh) if !status(sh).is_empty() => format!("{} · {}", r.verdict.text(), status(sh)),
            _ => r.verdict.text(),
        };
        let mut cells = vec![
            format!("{} {}", kind_glyph(r.kind), r.target),
            goal(r.goal_pct),
            if r.achievable_pct.is_finite() {
                format!("{:.1}%", r.achievable_pct)
            } else {
                "—".into()
            },
        ];
        if wide {
            cells.push(r.epochs.to_string());
            cells.push(format!("{:.0}", r.exptime_per_epoch_s));
        }
        cells.push(format!("{:.1}", r.hours));
        cells.push(format!("{:.1}", r.hours_expected));
        cells.push(match sh {
            Some(sh) => format!("{:.1}", sh.hours),
            None => "—".into(),
        });
        cells.push(verdict.clone());
        let sel = sel_name.as_deref() == Some(r.target.as_str());
        let style = if sel { th.selected() } else { th.text() };
        put(buf, area.x, y, &line(&cells), area.width, style);
        let short = sh.is_some_and(|x| !x.goal_met) || r.verdict_label != "reachable";
        if short && !sel {
            // The verdict column carries words as well as the style.
            let x = used as u16;
            if x < area.width {
                put(buf, area.x + x, y, &verdict, area.width - x, th.notice());
            }
        }
    }
    // The selected target's reason: what stops its goal (the constraint or
    // the error term, as `rung budget --json` gives it), its share's why,
    // else the verdict, and the method's notes, each said once; then its
    // σd/d by term.
    let fy = area.y + area.height - foot;
    let reason = reason_items(b, sel_name.as_deref());
    for (k, l) in note_lines(&reason, area.width as usize, reason_lines as usize)
        .iter()
        .enumerate()
    {
        put(buf, area.x, fy + k as u16, l, area.width, th.notice());
    }
    for (k, l) in terms.iter().enumerate() {
        put(
            buf,
            area.x,
            fy + reason_lines + k as u16,
            l,
            area.width,
            th.text(),
        );
    }
    let ty = fy + reason_lines + terms_lines;
    for (k, l) in totals.iter().enumerate() {
        put(buf, area.x, ty + k as u16, l, area.width, th.text());
    }
    put(
        buf,
        area.x,
        ty + totals.len() as u16,
        &{
            // The export folder last, its end kept when the line is too
            // long (x names every file it writes, in full).
            let keys = format!(
                "{}: hours & range · X: plan at {:.0} h/night ({}/{}) · {}: export to ",
                keys_for(Scope::Main, Action::BudgetAsk),
                s.plan_hours_per_night,
                keys_for(Scope::Main, Action::PlanHoursDown),
                keys_for(Scope::Main, Action::PlanHoursUp),
                keys_for(Scope::Main, Action::Export),
            );
            let room = (area.width as usize).saturating_sub(keys.chars().count());
            format!(
                "{keys}{}",
                fit_end(&s.budget_ask.export_dir.display().to_string(), room)
            )
        },
        area.width,
        th.dim(),
    );
}

/// One term of a row's σd/d in the words of `rung budget`
/// ([`crate::plan::budget::terms_words`]).
fn terms_part(t: &crate::ladder::ErrorTerm) -> String {
    format!("{} {} %", t.name, crate::output::num(t.distance_pct, 2))
}

/// What the view says of the selected target `name`, as the view and its
/// notes window (`m`) give it: what stops its goal (the constraint or the
/// error term, as `rung budget --json` gives it), its share's why, else
/// the verdict, and the method's notes, each said once, the first after
/// the target's name; for a target not budgeted, why.
pub fn reason_items(b: &crate::plan::budget::Budget, name: Option<&str>) -> Vec<String> {
    let Some(name) = name else {
        return Vec::new();
    };
    if let Some(i) = b.rows.iter().position(|r| r.target == name) {
        let r = &b.rows[i];
        let (limit, why) = match b.allocation.as_ref().and_then(|a| a.shares.get(i)) {
            Some(sh) => (sh.limit.clone(), sh.why.clone()),
            None => (r.limit.clone(), r.verdict.text()),
        };
        let mut parts = Vec::new();
        if !limit.is_empty() {
            parts.push(format!("not met, by {limit}"));
        }
        parts.push(why);
        parts.extend(r.notes.iter().cloned());
        let mut items = once_each(parts);
        if let Some(first) = items.first_mut() {
            *first = format!("{}: {first}", r.target);
        }
        return items;
    }
    vec![
        b.observed
            .iter()
            .find(|o| o.target == name)
            .map(|o| o.text.clone())
            .or_else(|| {
                b.skipped
                    .iter()
                    .find(|(n, _)| n == name)
                    .map(|(n, why)| format!("{n}: skipped: {why}"))
            })
            .unwrap_or_else(|| format!("{name}: not in the budget")),
    ]
}

/// Parts of a reason, each said once: a part already said by an earlier
/// one (the same words, or within it) is left out, and a part that says an
/// earlier one and more takes its place.
pub fn once_each(parts: Vec<String>) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for p in parts {
        let p = p.trim().to_string();
        if p.is_empty() || out.iter().any(|o| o.contains(&p)) {
            continue;
        }
        out.retain(|o| !p.contains(o.as_str()));
        out.push(p);
    }
    out
}

/// The totals in lines of at most `w` characters, at most `max` lines:
/// science + calibrations = total in clear weather and with the weather
/// (`plan::budget::total_parts`, the words of `rung budget`), the targets
/// skipped and the semesters' totals; a part is shown whole or, when the
/// lines are full, not at all (the semesters first to go).
pub fn totals_lines(b: &crate::plan::budget::Budget, w: usize, max: usize) -> Vec<String> {
    let mut parts = crate::plan::budget::total_parts(b);
    parts.push(format!("{} skipped", b.skipped.len()));
    if !b.observed.is_empty() {
        parts.push(format!(
            "observed, serving the ladder, no goal: {}",
            b.observed
                .iter()
                .map(|o| o.target.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    if !b.semesters.is_empty() {
        parts.push(format!(
            "by semester {} h",
            b.semesters
                .iter()
                .map(|x| format!("{} {}", x.label, crate::output::num(x.hours, 1)))
                .collect::<Vec<_>>()
                .join(" · ")
        ));
    }
    pack(parts, w, max, " · ")
}

/// Parts joined by `sep` into lines of at most `w` characters, at most
/// `max` lines; a part is shown whole or, when the lines are full, not at
/// all (a part longer than a line is cut to it).
pub fn pack(parts: Vec<String>, w: usize, max: usize, sep: &str) -> Vec<String> {
    let gap = sep.chars().count();
    let mut lines: Vec<String> = Vec::new();
    for p in parts {
        let p = if p.chars().count() > w {
            p.chars().take(w).collect()
        } else {
            p
        };
        let n = p.chars().count();
        let room = lines.len() < max && n <= w;
        match lines.last_mut() {
            Some(l) if l.chars().count() + gap + n <= w => {
                l.push_str(sep);
                l.push_str(&p);
            }
            _ if room => lines.push(p),
            _ => {}
        }
    }
    lines
}

/// The request form: hours asked, range, export folder.
pub fn ask_form(s: &State, f: &AskForm, area: Rect, buf: &mut Buffer) {
    let h = (FIELDS.len() as u16 * 2 + 5).min(area.height);
    let r = centered(area, 76, h);
    let inner = frame("Budget: hours asked and range", r, buf, s);
    let vw = inner.width.saturating_sub(16) as usize;
    for (k, (label, hint)) in FIELDS.iter().enumerate() {
        let y = inner.y + 2 * k as u16;
        if y + 1 >= inner.y + inner.height {
            break;
        }
        let focused = k == f.focus;
        let bad = f.error.as_ref().is_some_and(|e| e.0 == k);
        let mark = if bad {
            "✗"
        } else if focused {
            "▸"
        } else {
            " "
        };
        put(
            buf,
            inner.x,
            y,
            &format!("{mark}{}", fit(label, 14)),
            15,
            if bad { s.theme.warn() } else { s.theme.text() },
        );
        let v = &f.fields[k];
        // The end of a long value stays in view while it is typed.
        let shown = if focused {
            format!("{v}▏")
        } else {
            v.clone()
        };
        let n = shown.chars().count();
        let shown: String = if n > vw {
            shown.chars().skip(n - vw).collect()
        } else {
            shown
        };
        put(
            buf,
            inner.x + 16,
            y,
            &shown,
            vw as u16,
            if focused {
                s.theme.selected()
            } else {
                s.theme.text()
            },
        );
        put(buf, inner.x + 16, y + 1, hint, vw as u16, s.theme.dim());
    }
    let ey = inner.y + inner.height.saturating_sub(2);
    if let Some((k, msg)) = &f.error {
        super::fmt::put_form_error(
            buf,
            inner,
            ey,
            &format!("✗ {}: {msg}", FIELDS[*k].0),
            s.theme.warn(),
        );
    }
    let keys = format!(
        "{} check and use · {} drop · {} next field",
        keys_for(Scope::Form, Action::Accept),
        keys_for(Scope::Form, Action::Cancel),
        keys_for(Scope::Form, Action::NextField),
    );
    put(buf, inner.x, ey + 1, &keys, inner.width, s.theme.dim());
}

/// The files an export wrote, each named in full (wrapped where a name is
/// longer than the box).
pub fn exported(s: &State, files: &[std::path::PathBuf], area: Rect, buf: &mut Buffer) {
    let w = area.width.min(100).saturating_sub(2).max(10) as usize;
    let mut lines = vec!["Written:".to_string()];
    for f in files {
        lines.extend(wrap(&f.display().to_string(), w));
    }
    text_window(
        s,
        area,
        buf,
        "Exported",
        100,
        &lines,
        s.theme.text(),
        0,
        &|_| "any key closes".to_string(),
        s.theme.dim(),
    );
}
