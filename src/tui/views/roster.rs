//! Roster: every target of the programme with tonight's window.

use crate::io::targets::Target;
use crate::tui::state::{Progress, State, scroll_offset};
use crate::tui::theme::kind_glyph;
use crate::tui::views::fmt::{dec_text, fit, goal, hm, num, put, ra_text, rfit};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Tonight's main window as local "HH:MM-HH:MM" ("+" when there are more), "none", or "…" while computing.
pub fn window_text(s: &State, t: &Target) -> String {
    match s.row(&t.name) {
        None => "…".into(),
        Some(r) => match r.night.main_window() {
            None => "none".into(),
            Some(w) => {
                let more = if r.night.windows.len() > 1 { "+" } else { "" };
                format!(
                    "{}-{}{more}",
                    hm(Some(w.0), s.site()),
                    hm(Some(w.1), s.site())
                )
            }
        },
    }
}

/// Width of the goal-progress column.
pub const PROGRESS_W: usize = 11;

/// Progress towards the distance goal: the method's predicted σd/d over the
/// budget's months against the goal, "4.1/3%" (✓ when the budget calls the goal
/// reachable), "4 seas/3%" when the method needs more seasons than the range
/// to say, "unobs/3%" when not observable, "…/3%" while computing, "—/3%" when
/// the method gives nothing (no method, failed), "—" without a goal.
pub fn progress_text(s: &State, t: &Target) -> String {
    let g = |x: f64| goal(x).trim_end_matches('%').to_string();
    match s.progress(t) {
        Progress::NoGoal => "—".into(),
        Progress::Pending { goal_pct } => format!("…/{}%", g(goal_pct)),
        Progress::Unavailable { goal_pct, .. } => format!("—/{}%", g(goal_pct)),
        Progress::Predicted {
            achievable_pct,
            goal_pct,
            reached,
            verdict,
        } => {
            let a = if !achievable_pct.is_finite() {
                verdict.short()
            } else if achievable_pct >= 100.0 {
                ">99".to_string()
            } else {
                format!("{achievable_pct:.1}")
            };
            format!("{a}/{}%{}", g(goal_pct), if reached { "✓" } else { " " })
        }
    }
}

fn header_and_cells(s: &State, t: Option<&Target>, wide: bool) -> Vec<(String, usize, bool)> {
    // (text, width, right-aligned)
    let r = t.and_then(|t| s.row(&t.name));
    let pending = t.is_some() && r.is_none();
    let dash = |v: String| if pending { "…".to_string() } else { v };
    let mut c = vec![
        (
            t.map(|t| format!("{} ", kind_glyph(t.kind)))
                .unwrap_or_else(|| "  ".into()),
            2,
            false,
        ),
        (
            t.map(|t| t.name.clone()).unwrap_or("name".into()),
            14,
            false,
        ),
        (
            t.map(|t| t.kind.as_str().to_string())
                .unwrap_or("kind".into()),
            9,
            false,
        ),
        (
            t.map(|t| window_text(s, t)).unwrap_or("window".into()),
            12,
            false,
        ),
        (
            t.map(|_| dash(num(r.map(|r| r.night.observable_hours), 1)))
                .unwrap_or("hours".into()),
            5,
            true,
        ),
        (
            t.map(|_| dash(num(r.and_then(|r| r.night.min_airmass), 2)))
                .unwrap_or("airm".into()),
            5,
            true,
        ),
        (
            t.map(|_| {
                dash(
                    r.and_then(|r| r.moon_separation_deg)
                        .map(|m| format!("{m:.0}°"))
                        .unwrap_or("—".into()),
                )
            })
            .unwrap_or("Moon".into()),
            5,
            true,
        ),
        (
            t.map(|t| progress_text(s, t)).unwrap_or("σd/d·goal".into()),
            PROGRESS_W,
            true,
        ),
    ];
    if wide {
        c.push((
            t.map(|_| dash(hm(r.and_then(|r| r.night.transit.t), s.site())))
                .unwrap_or("trans".into()),
            6,
            true,
        ));
        c.push((
            t.map(|_| {
                dash(
                    r.and_then(|r| r.night.max_altitude_deg)
                        .map(|a| format!("{a:.0}°"))
                        .unwrap_or("—".into()),
                )
            })
            .unwrap_or("max".into()),
            5,
            true,
        ));
        c.push((
            t.map(|t| ra_text(t.ra_deg)).unwrap_or("RA".into()),
            9,
            false,
        ));
        c.push((
            t.map(|t| dec_text(t.dec_deg)).unwrap_or("Dec".into()),
            10,
            false,
        ));
        c.push((
            t.map(|t| format!("{}", t.priority))
                .unwrap_or("prio".into()),
            4,
            true,
        ));
    }
    c.push((
        t.map(|_| {
            if r.is_some_and(|r| r.sun_caution.is_some()) {
                "☼!".to_string()
            } else {
                String::new()
            }
        })
        .unwrap_or("sun".into()),
        3,
        false,
    ));
    if wide {
        c.push((
            t.map(|t| t.notes.clone()).unwrap_or("notes".into()),
            40,
            false,
        ));
    }
    c
}

fn line(cells: &[(String, usize, bool)]) -> String {
    cells
        .iter()
        .map(|(t, w, right)| if *right { rfit(t, *w) } else { fit(t, *w) })
        .collect::<Vec<_>>()
        .join(" ")
}

/// Draw the Roster view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 3 {
        return;
    }
    let wide = area.width >= 130;
    let filter = if s.filter.is_empty() {
        String::new()
    } else {
        format!(" · filter '{}'", s.filter)
    };
    let title = format!(
        "Roster · {} of {} targets · by {}{} · window: alt > {:.0}°, Sun < {:.0}°{}",
        s.order.len(),
        s.targets.len(),
        s.sort.label(),
        if s.sort_rev { " (reversed)" } else { "" },
        s.settings.limits.min_alt_deg,
        s.settings.limits.sun_alt_deg,
        filter
    );
    put(buf, area.x, area.y, &title, area.width, th.title());
    put(
        buf,
        area.x,
        area.y + 1,
        &line(&header_and_cells(s, None, wide)),
        area.width,
        th.header(),
    );
    let rows = (area.height - 2) as usize;
    let off = scroll_offset(s.sel, rows);
    if s.order.is_empty() {
        let why = if s.targets.is_empty() {
            "no targets yet: press a to add one"
        } else {
            "no target matches the filter (Esc in the filter clears it)"
        };
        put(buf, area.x, area.y + 2, why, area.width, th.dim());
    }
    for (k, idx) in s.order.iter().skip(off).take(rows).enumerate() {
        let t = &s.targets[*idx];
        let y = area.y + 2 + k as u16;
        let cells = header_and_cells(s, Some(t), wide);
        let text = line(&cells);
        let sel = off + k == s.sel;
        let style = if sel { th.selected() } else { th.text() };
        if sel {
            buf.set_style(Rect::new(area.x, y, area.width, 1), style);
        }
        put(buf, area.x, y, &text, area.width, style);
        if s.row(&t.name).is_some_and(|r| r.sun_caution.is_some()) {
            // Re-draw the flag in the caution style.
            let x: usize = cells
                .iter()
                .take_while(|c| c.0 != "☼!")
                .map(|c| c.1 + 1)
                .sum();
            if (x as u16) < area.width {
                put(buf, area.x + x as u16, y, "☼!", 2, th.warn());
            }
        }
    }
}

/// A narrow roster beside another view: glyph, name and window.
pub fn render_compact(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 2 {
        return;
    }
    put(buf, area.x, area.y, "Roster", area.width, th.title());
    let rows = (area.height - 1) as usize;
    let off = scroll_offset(s.sel, rows);
    for (k, idx) in s.order.iter().skip(off).take(rows).enumerate() {
        let t = &s.targets[*idx];
        let y = area.y + 1 + k as u16;
        let sel = off + k == s.sel;
        let style = if sel { th.selected() } else { th.text() };
        let text = format!(
            "{} {} {}",
            kind_glyph(t.kind),
            fit(&t.name, 14),
            window_text(s, t)
        );
        put(
            buf,
            area.x,
            y,
            &fit(&text, area.width as usize),
            area.width,
            style,
        );
    }
}
