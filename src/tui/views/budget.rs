//! Budget: every target's distance goal against what its method reaches in
//! the coming year, the epochs and hours it takes (from `plan::budget::budget`,
//! as `rung budget`), and the hours by semester.

use crate::tui::keymap::Action;
use crate::tui::keymap::{Scope, keys_for};
use crate::tui::state::{State, scroll_offset};
use crate::tui::theme::kind_glyph;
use crate::tui::views::fmt::{fit, goal, put, rfit};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Draw the Budget view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 6 || area.width < 40 {
        put(
            buf,
            area.x,
            area.y,
            "Budget: window too small",
            area.width,
            th.dim(),
        );
        return;
    }
    let st = &s.settings;
    let title = format!(
        "Budget · {} to {} · {} · {}",
        st.from,
        st.to,
        st.site.name,
        st.instrument().name
    );
    put(buf, area.x, area.y, &title, area.width, th.title());
    let b = match s.budget_now() {
        None => {
            put(
                buf,
                area.x,
                area.y + 2,
                "computing each target's goal (this takes a while for parallaxes)…",
                area.width,
                th.dim(),
            );
            return;
        }
        Some(Err(e)) => {
            put(
                buf,
                area.x,
                area.y + 2,
                &format!("budget not computed: {e}"),
                area.width,
                th.warn(),
            );
            return;
        }
        Some(Ok(b)) => b,
    };
    // The verdict takes the rest of the line, so it is never cut where
    // there is room for it (at least 24 cells).
    let verdict_w = (area.width as usize)
        .saturating_sub(15 + 5 + 6 * 4 + 6)
        .max(24);
    let cols: [(&str, usize, bool); 7] = [
        ("target", 15, false),
        ("goal", 5, true),
        ("reach", 6, true),
        ("epochs", 6, true),
        ("exp s", 6, true),
        ("hours", 6, true),
        ("verdict", verdict_w, false),
    ];
    let line = |v: [String; 7]| -> String {
        v.iter()
            .zip(cols.iter())
            .map(|(t, (_, w, r))| if *r { rfit(t, *w) } else { fit(t, *w) })
            .collect::<Vec<_>>()
            .join(" ")
    };
    put(
        buf,
        area.x,
        area.y + 1,
        &line(cols.map(|c| c.0.to_string())),
        area.width,
        th.header(),
    );
    let foot = 2u16;
    let rows = area.height.saturating_sub(2 + foot) as usize;
    // The selected target's row stays in view.
    let sel_name = s.selected().map(|t| t.name.clone());
    let sel_idx = sel_name
        .as_ref()
        .and_then(|n| b.rows.iter().position(|r| &r.target == n))
        .unwrap_or(0);
    let off = scroll_offset(sel_idx, rows);
    for (k, r) in b.rows.iter().skip(off).take(rows).enumerate() {
        let y = area.y + 2 + k as u16;
        let text = line([
            format!("{} {}", kind_glyph(r.kind), r.target),
            goal(r.goal_pct),
            if r.achievable_pct.is_finite() {
                format!("{:.1}%", r.achievable_pct)
            } else {
                "—".into()
            },
            r.epochs.to_string(),
            format!("{:.0}", r.exptime_per_epoch_s),
            format!("{:.1}", r.hours),
            r.verdict.text(),
        ]);
        let sel = sel_name.as_deref() == Some(r.target.as_str());
        let st = if sel { th.selected() } else { th.text() };
        put(buf, area.x, y, &text, area.width, st);
        if r.verdict_label != "reachable" && !sel {
            // The verdict column carries a word as well as the style.
            let x = cols.iter().take(6).map(|c| c.1 as u16 + 1).sum::<u16>();
            if x < area.width {
                put(
                    buf,
                    area.x + x,
                    y,
                    &r.verdict.text(),
                    area.width - x,
                    th.notice(),
                );
            }
        }
    }
    let fy = area.y + area.height - foot;
    let sem: Vec<String> = b
        .hours_by_semester
        .iter()
        .map(|(k, h)| format!("{k} {h:.1} h"))
        .collect();
    put(
        buf,
        area.x,
        fy,
        &format!(
            "total {:.1} h · {} · {} skipped",
            b.total_hours,
            sem.join(" · "),
            b.skipped.len()
        ),
        area.width,
        th.text(),
    );
    put(
        buf,
        area.x,
        fy + 1,
        &format!(
            "x: budget CSV+MD · X: plan at {:.0} h/night ({}/{}) JSON CSV iCal sheet",
            s.plan_hours_per_night,
            keys_for(Scope::Main, Action::PlanHoursDown),
            keys_for(Scope::Main, Action::PlanHoursUp)
        ),
        area.width,
        th.dim(),
    );
}
