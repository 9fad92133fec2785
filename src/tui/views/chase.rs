//! Chase: a transient's follow-up timeline (from `TransientMethod::chase`):
//! night by night the window, the rest-frame phase, the expected magnitude, the
//! exposure, the Moon, and which nights the chosen cadence observes.

use super::chase_foot::{extra_rows, note, summary};
use crate::tui::state::{MethodBody, State, View, detail_offset, detail_rows};
use crate::tui::views::fmt::{fit, goal, hm, put, rfit, title_parts, wrap_at_most};
use crate::tui::views::scroll_mark;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Draw the Chase view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 8 || area.width < 40 {
        put(
            buf,
            area.x,
            area.y,
            "Chase: window too small",
            area.width,
            th.dim(),
        );
        return;
    }
    let name = s.selected().map(|t| t.name.clone()).unwrap_or_default();
    if let Some(MethodBody::Calibrated(r)) = s.method_now() {
        let host = s.selected().map(|t| t.host.clone()).unwrap_or_default();
        let lines = [
            (
                format!("Chase · ✶ {name} · calibrator already observed"),
                th.title(),
            ),
            (
                "nothing to chase: its light curve is fitted (peak_err_mag given)".to_string(),
                th.dim(),
            ),
            (
                format!(
                    "host {host} μ {:.3} ± {:.3} mag",
                    r.host_mu_mag, r.host_mu_err_mag
                ),
                th.text(),
            ),
            (format!("  from {}", r.host_source), th.dim()),
            (
                format!(
                    "calibrated M_B {:.3} ± {:.3} mag (host {:.3}, own {:.3})",
                    r.peak_abs_mag, r.sigma_mag, r.sigma_host_mag, r.sigma_own_mag
                ),
                th.text(),
            ),
        ];
        // Then how M_B was found, whole (the words of `rung ladder`).
        let how = super::budget::wrap(&r.peak_abs_mag_how, area.width.saturating_sub(2) as usize);
        let all = lines
            .into_iter()
            .chain(how.into_iter().map(|l| (format!("  {l}"), th.dim())))
            .chain(std::iter::once((
                "as rung ladder and rung chase".to_string(),
                th.dim(),
            )));
        for (k, (t, st)) in all.enumerate().take(area.height as usize) {
            put(buf, area.x, area.y + k as u16, &t, area.width, st);
        }
        return;
    }
    let Some(MethodBody::Chase(c)) =
        super::method_report(s, area, buf, "Chase", "computing the chase…")
    else {
        return;
    };
    let cadence = c.cadence_short();
    put(
        buf,
        area.x,
        area.y,
        &title_parts(
            &["Chase".to_string(), format!("✶ {name}")]
                .into_iter()
                .chain(c.provisional.then(|| "PROVISIONAL".to_string()))
                .chain([
                    c.bands.join(""),
                    format!(
                        "max {} (B {:.1})",
                        c.t_max.local(&s.site().timezone).format("%Y-%m-%d"),
                        c.placement.params.m_max
                    ),
                    format!("goal {}", goal(c.goal_pct)),
                ])
                .collect::<Vec<_>>(),
            area.width as usize,
        ),
        area.width,
        th.title(),
    );
    let cols: [(&str, usize, bool); 8] = [
        ("night", 10, false),
        ("window", 11, false),
        ("phase", 7, true),
        ("B", 5, true),
        ("exp s", 6, true),
        ("airm", 5, true),
        ("Moon", 5, true),
        ("plan", 6, false),
    ];
    let line = |v: [String; 8]| -> String {
        v.iter()
            .zip(cols.iter())
            .map(|(t, (_, w, r))| if *r { rfit(t, *w) } else { fit(t, *w) })
            .collect::<Vec<_>>()
            .join(" ")
    };
    let head = line(cols.map(|c| c.0.to_string()));
    put(buf, area.x, area.y + 1, &head, area.width, th.header());
    // The summary and the note each take a second line when they need it,
    // from the nights (as `State::detail_len` counts them).
    let extra = extra_rows(c, area.width);
    let foot = 3 + extra as u16;
    let rows = detail_rows(View::Chase, area.height).saturating_sub(extra);
    let off = detail_offset(s.detail_scroll, rows, c.nights.len());
    let fy = area.y + area.height - foot;
    for (k, n) in c.nights.iter().skip(off).take(rows).enumerate() {
        let y = area.y + 2 + k as u16;
        let w = match (n.window_start, n.window_end) {
            (Some(a), Some(b)) => format!("{}-{}", hm(Some(a), s.site()), hm(Some(b), s.site())),
            _ => "none".into(),
        };
        let plan = if n.planned && n.classification {
            "◆ spec"
        } else if n.planned {
            "● obs"
        } else if n.usable {
            "○"
        } else {
            "—"
        };
        let text = line([
            n.night.format("%a %b %d").to_string(),
            w,
            n.phase_days
                .map(|p| format!("{p:+.1}d"))
                .unwrap_or("—".into()),
            n.expected_mag
                .map(|m| format!("{m:.1}"))
                .unwrap_or("—".into()),
            n.exptime_s.map(|e| format!("{e:.0}")).unwrap_or("—".into()),
            n.best_airmass
                .map(|x| format!("{x:.2}"))
                .unwrap_or("—".into()),
            format!("{:.0}°", n.moon_separation_deg),
            plan.to_string(),
        ]);
        let st = if n.planned { th.text() } else { th.dim() };
        let end = put(buf, area.x, y, &text, area.width, st);
        let extra = if !n.cautions.is_empty() {
            Some(("☼ Sun".to_string(), th.warn()))
        } else {
            n.reason.clone().map(|r| (r, th.dim()))
        };
        if let Some((t, st)) = extra {
            let x = end + 1;
            if x < area.x + area.width {
                put(buf, x, y, &t, area.x + area.width - x, st);
            }
        }
    }
    let summary = wrap_at_most(&summary(c), area.width as usize, 2);
    for (i, l) in summary.iter().enumerate() {
        put(buf, area.x, fy + i as u16, l, area.width, th.text());
    }
    let fy = fy + summary.len().max(1) as u16 - 1;
    // A calibrator: its host's distance and the peak absolute magnitude it
    // calibrates (the numbers of `rung chase` and `rung ladder`), in place
    // of the legend.
    let host = s
        .selected()
        .map(|t| t.host.clone())
        .filter(|h| !h.is_empty())
        .unwrap_or_else(|| "host".into());
    let (legend, lst) = match c.calibration() {
        Some(cal) => (
            format!(
                "{host} μ {:.3}±{:.3} → M_B {:.3}±{:.3} (host {:.3}, own {:.3})",
                cal.host_mu_mag,
                cal.host_mu_err_mag,
                cal.peak_abs_mag,
                cal.sigma_mag,
                cal.sigma_host_mag,
                cal.sigma_own_mag
            ),
            th.text(),
        ),
        None => {
            // The full form when it fits beside the scroll mark, else the
            // compact one (both `Chase`'s words).
            let full = format!("● obs ◆ +spectrum ○ usable · {cadence}");
            let mark = if c.nights.len() > rows { 30 } else { 0 };
            if full.chars().count() + mark < area.width as usize {
                (full, th.dim())
            } else {
                (
                    format!("● obs ◆ +spectrum ○ usable · {}", c.cadence_compact()),
                    th.dim(),
                )
            }
        }
    };
    put(buf, area.x, fy + 1, &legend, area.width, lst);
    let (lines, warn) = note(c, area.width);
    let st = if warn { th.warn() } else { th.dim() };
    for (i, l) in lines.iter().enumerate() {
        put(buf, area.x, fy + 2 + i as u16, l, area.width, st);
    }
    scroll_mark(s, area, fy + 1, off, rows, c.nights.len(), buf);
}
