//! The Next view: what to observe now, ranked by the library
//! (`crate::plan::now::queue`), with tonight's planned visits to mark done or
//! lost and a re-plan. It shows the queue the state holds and computes nothing.
//!
//! Layout: a heading line (instant, Sun, plan), one line per row (rank,
//! visibility glyph, target, visit, altitude, hour angle, airmass, Moon
//! distance, minutes left, exposure), then the selected row's reasons
//! (wrapped onto up to three lines, kept for them) and the keys, or the
//! line being typed for a visit marked done.

use super::fmt::{fit, num, put, wrap_at_most};
use crate::tui::state::State;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// The most lines the selected row's reasons take under the table.
const WHY_LINES: usize = 3;

/// Draw the Next view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    let Some(d) = &s.next else {
        put(
            buf,
            area.x,
            area.y,
            "ranking what to observe now…",
            area.width,
            th.dim(),
        );
        return;
    };
    let q = match &d.queue {
        Ok(q) => q,
        Err(e) => {
            put(
                buf,
                area.x,
                area.y,
                &format!("no ranking: {e}"),
                area.width,
                th.warn(),
            );
            return;
        }
    };
    let tz = &s.settings.site.timezone;
    let plan = match (&s.plan_file, &d.plan) {
        (Some(p), Some(_)) => format!(
            "plan {}",
            p.file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default()
        ),
        (Some(_), None) => "plan unreadable".into(),
        (None, _) => "no plan (rung tui --plan FILE)".into(),
    };
    put(
        buf,
        area.x,
        area.y,
        &format!(
            "Now {} UTC {} local, Sun {}°{} · {plan}",
            crate::output::clock_hm(q.at, &chrono_tz::UTC),
            crate::output::clock_hm(q.at, tz),
            num(Some(q.sun_altitude_deg), 1),
            if q.dark { "" } else { " (not dark)" },
        ),
        area.width,
        th.title(),
    );
    put(
        buf,
        area.x,
        area.y + 1,
        " # ▲ target      visit          alt°  HA h    X moon° left exposure",
        area.width,
        th.dim(),
    );
    // The selected row's reasons, whole: wrapped onto up to WHY_LINES
    // lines (a Sun caution first), always that many kept for them so that
    // the table does not change height as the selection moves.
    let why_lines: Vec<String> = q
        .rows
        .get(s.next_sel)
        .map(|r| {
            wrap_at_most(
                &format!("{}: {}", r.target, r.why()),
                area.width as usize,
                WHY_LINES,
            )
        })
        .unwrap_or_default();
    let foot = 2 + WHY_LINES as u16;
    let rows_h = area.height.saturating_sub(2 + foot) as usize;
    let first = s.next_sel.saturating_sub(rows_h.saturating_sub(1));
    for (k, r) in q.rows.iter().enumerate().skip(first).take(rows_h) {
        let y = area.y + 2 + (k - first) as u16;
        let glyph = if r.sun_caution.is_some() {
            "!"
        } else if r.visible {
            "▲"
        } else {
            "·"
        };
        let exposure = r
            .exposures
            .iter()
            .map(|b| {
                format!(
                    "{}{}×{}",
                    b.band.chars().next().unwrap_or('?'),
                    b.n_exposures,
                    num(Some(b.exptime_s / b.n_exposures.max(1) as f64), 0)
                )
            })
            .collect::<Vec<_>>()
            .join(" ");
        let line = format!(
            "{:>2} {} {} {} {:>5} {:>5} {:>4} {:>5} {:>4} {}",
            r.rank,
            glyph,
            fit(&r.target, 11),
            fit(
                &match (&r.visit_id, &r.done_visit_id, r.done_start) {
                    (Some(id), _, _) => id.clone(),
                    // Done tonight: ✓ and its observed start (the reasons
                    // below say it whole, as `rung next` does).
                    (None, Some(_), Some(t)) =>
                        format!("✓ done {}", crate::output::clock_hm(t, tz)),
                    _ => "–".into(),
                },
                13
            ),
            num(Some(r.altitude_deg), 1),
            num(Some(r.hour_angle_h), 2),
            num(r.airmass.filter(|x| *x < 10.0), 2),
            num(Some(r.moon_separation_deg), 0),
            if r.visible {
                format!("{:.0}m", r.minutes_left)
            } else {
                "–".into()
            },
            exposure
        );
        let style = if k == s.next_sel {
            th.selected()
        } else if r.visible {
            th.text()
        } else {
            th.dim()
        };
        put(buf, area.x, y, &line, area.width, style);
    }
    let fy = area.y + area.height.saturating_sub(foot);
    if let Some(r) = q.rows.get(s.next_sel) {
        let style = if r.sun_caution.is_some() {
            th.warn()
        } else {
            th.text()
        };
        for (i, l) in why_lines.iter().enumerate() {
            put(buf, area.x, fy + i as u16, l, area.width, style);
        }
    }
    let fy = fy + WHY_LINES as u16 - 1;
    let help = match &s.next_prompt {
        // What is typed first, so that it stays on screen as it grows; the
        // hint after it.
        Some((id, text)) => format!(
            "{id} done › {text}▏  seeing, snr= and comment (\"1.2 snr=80 cirrus\"), Enter, Esc"
        ),
        None => "D done · B lost · N rest of night lost · R re-plan · ↑↓ select".into(),
    };
    put(buf, area.x, fy + 1, &help, area.width, th.dim());
    if s.next_prompt.is_some() {
        // The clock at Enter is taken as the visit's start (as `rung plan
        // --done` without --observed takes the clock when marking).
        let start = format!(
            "visit's start, as observed: the clock when marking, {} UTC, {} local",
            crate::output::clock_hm(s.now, &chrono_tz::UTC),
            crate::output::clock_hm(s.now, tz),
        );
        put(buf, area.x, fy + 2, &start, area.width, th.text());
    } else if let Some(n) = &d.note
        && s.message.as_ref().map(|m| &m.0) != Some(n)
    {
        // The last mark's confirmation, once another message has taken the
        // bottom line (while it is the message, it is said there, whole).
        put(buf, area.x, fy + 2, n, area.width, th.dim());
    }
}
