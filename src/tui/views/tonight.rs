//! Tonight: the selected target's altitude through the night over twilight
//! bands, the Moon's track, the minimum altitude and the current time.

use crate::tui::state::{NightData, State, TargetRow};
use crate::tui::theme::{band_glyph, kind_glyph};
use crate::tui::views::chart::{Braille, interp};
use crate::tui::views::fmt::{dec_text, goal, hm, num, put, ra_text, title_parts};
use crate::tui::views::roster;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Width at which a compact roster is shown beside the chart.
pub const SIDE_ROSTER_MIN_WIDTH: u16 = 140;

/// The span of the chart: an hour before sunset to an hour after sunrise
/// (the whole noon-to-noon span when the Sun does not set), seconds since the night's start.
pub fn span_s(n: &NightData) -> (f64, f64) {
    let total = n.end.seconds_since(&n.start);
    let a = n
        .events
        .sunset
        .t
        .map(|t| t.seconds_since(&n.start) - 3600.0)
        .unwrap_or(0.0)
        .max(0.0);
    let b = n
        .events
        .sunrise
        .t
        .map(|t| t.seconds_since(&n.start) + 3600.0)
        .unwrap_or(total)
        .min(total);
    if b - a < 3600.0 { (0.0, total) } else { (a, b) }
}

/// Draw the Tonight view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    let mut area = area;
    if area.width >= SIDE_ROSTER_MIN_WIDTH {
        let side = Rect::new(area.x, area.y, 34, area.height);
        roster::render_compact(s, side, buf);
        area = Rect::new(area.x + 35, area.y, area.width - 35, area.height);
    }
    if area.height < 8 || area.width < 30 {
        put(
            buf,
            area.x,
            area.y,
            "Tonight: window too small",
            area.width,
            th.dim(),
        );
        return;
    }
    let t = s.selected();
    let title = match t {
        Some(t) => {
            // The zone's name when it fits, else "local times" alone (the
            // header bar gives the local clock): never a name cut short.
            let parts = |zone: String| {
                [
                    "Tonight".to_string(),
                    format!("{} {} {}", kind_glyph(t.kind), t.name, t.kind.as_str()),
                    format!("night of {}", s.date),
                    zone,
                ]
            };
            let whole = format!("local times ({})", s.site().timezone.name());
            let w = area.width as usize;
            let title = title_parts(&parts(whole.clone()), w);
            if title.ends_with(&whole) {
                title
            } else {
                title_parts(&parts("local times".to_string()), w)
            }
        }
        None => format!("Tonight · no target selected · night of {}", s.date),
    };
    put(buf, area.x, area.y, &title, area.width, th.title());
    let Some(n) = s.night_now() else {
        let why = s
            .night_error
            .clone()
            .unwrap_or_else(|| "computing the night…".into());
        put(buf, area.x, area.y + 2, &why, area.width, th.dim());
        return;
    };
    let row = t.and_then(|t| n.rows.get(&t.name));
    let details = 4u16;
    let chart_h = area.height - 1 - 3 - details; // title, strip+axis+legend, details
    let label_w = 4u16;
    let cw = area.width - label_w - 4; // room for the limit label on the right
    let cx = area.x + label_w;
    let cy = area.y + 1;
    let (t0, t1) = span_s(n);
    let col_t = |c: f64| t0 + (c + 0.5) / cw as f64 * (t1 - t0);

    // Backgrounds by Sun altitude, and the glyph strip under the chart.
    for c in 0..cw {
        let sun = interp(&n.grid_s, &n.sun_alt_deg, col_t(c as f64)).unwrap_or(0.0);
        let bg = th.sky_band(sun);
        buf.set_style(Rect::new(cx + c, cy, 1, chart_h), bg);
        if let Some(cell) = buf.cell_mut((cx + c, cy + chart_h)) {
            cell.set_char(band_glyph(sun));
            cell.set_style(th.dim());
        }
    }
    // Altitude labels.
    let y_of = |alt: f64| -> i64 {
        let dots = chart_h as f64 * 4.0 - 1.0;
        ((90.0 - alt) / 90.0 * dots).round() as i64
    };
    for a in [90.0, 60.0, 30.0, 0.0] {
        let row_y = (y_of(a) / 4) as u16;
        put(
            buf,
            area.x,
            cy + row_y,
            &format!("{a:>2.0}° "),
            label_w,
            th.dim(),
        );
    }
    // Minimum altitude line.
    let lim_y = (y_of(s.settings.limits.min_alt_deg) / 4) as u16;
    for c in 0..cw {
        if let Some(cell) = buf.cell_mut((cx + c, cy + lim_y)) {
            cell.set_char('┄');
            cell.set_style(th.limit());
        }
    }
    put(
        buf,
        cx + cw,
        cy + lim_y,
        &format!("{:.0}°", s.settings.limits.min_alt_deg),
        4,
        th.limit(),
    );
    // Current time.
    let now_s = s.now.seconds_since(&n.start);
    if now_s >= t0 && now_s <= t1 {
        let c = (((now_s - t0) / (t1 - t0)) * cw as f64).floor() as u16;
        let c = c.min(cw - 1);
        for y in 0..chart_h {
            if let Some(cell) = buf.cell_mut((cx + c, cy + y)) {
                cell.set_char('│');
                cell.set_style(th.now());
            }
        }
        put(buf, cx + c.saturating_sub(1), cy, "now", 3, th.now());
    }
    // Curves.
    let mut br = Braille::new(cw, chart_h);
    let dw = br.dots_w();
    let dot_t = |d: usize| t0 + (d as f64 + 0.5) / dw as f64 * (t1 - t0);
    for d in (0..dw).step_by(3) {
        if let Some(a) = interp(&n.grid_s, &n.moon_alt_deg, dot_t(d))
            && a >= 0.0
        {
            br.dot(d as i64, y_of(a), th.series_moon());
        }
    }
    if let Some(track) = t.and_then(|t| n.tracks.get(&t.name)) {
        let alt: Vec<f64> = track.iter().map(|a| *a as f64).collect();
        let mut prev: Option<(i64, i64)> = None;
        for d in 0..dw {
            let a = interp(&n.grid_s, &alt, dot_t(d));
            match a {
                Some(a) if a >= 0.0 => {
                    let p = (d as i64, y_of(a));
                    match prev {
                        Some(q) => br.line(q.0, q.1, p.0, p.1, th.series_target()),
                        None => br.dot(p.0, p.1, th.series_target()),
                    }
                    prev = Some(p);
                }
                _ => prev = None,
            }
        }
    }
    br.render(Rect::new(cx, cy, cw, chart_h), buf);

    // Hour labels (local).
    let axis_y = cy + chart_h + 1;
    let start_local = n.start;
    let mut last_end = 0u16;
    let step_h = if cw < 60 { 2 } else { 1 };
    let first_h = (t0 / 3600.0).ceil() as i64;
    for h in first_h..=((t1 / 3600.0).floor() as i64) {
        let ts = h as f64 * 3600.0;
        let inst = start_local.add_seconds(ts);
        let lt = inst.local(&s.site().timezone);
        use chrono::Timelike;
        if lt.minute() != 0 || (lt.hour() as i64) % step_h != 0 {
            continue;
        }
        let c = (((ts - t0) / (t1 - t0)) * cw as f64) as u16;
        if c < last_end || c + 2 > cw {
            continue;
        }
        put(
            buf,
            cx + c,
            axis_y,
            &format!("{:02}", lt.hour()),
            2,
            th.dim(),
        );
        last_end = c + 3;
    }
    // Legend.
    let legend = match t {
        Some(t) => format!(
            "⣿ {}  ⠂ Moon  ┄ limit  │ now · sky █ day ▓ civil ▒ naut ░ astro ' ' dark",
            t.name
        ),
        None => "⠂ Moon  ┄ limit  │ now · sky █ day ▓ civil ▒ naut ░ astro ' ' dark".into(),
    };
    put(buf, area.x, axis_y + 1, &legend, area.width, th.dim());

    // Details.
    let dy = axis_y + 2;
    let e = &n.events;
    let site = s.site();
    if let (Some(t), Some(r)) = (t, row) {
        put(
            buf,
            area.x,
            dy,
            &target_line(r, site, s.settings.limits.min_alt_deg),
            area.width,
            th.text(),
        );
        let id = format!(
            "rise {} transit {} set {} · RA {} Dec {} · goal {} · pri {} · {}",
            hm(r.night.rise.t, site),
            hm(r.night.transit.t, site),
            hm(r.night.set.t, site),
            ra_text(t.ra_deg),
            dec_text(t.dec_deg),
            t.goal_pct.map(goal).unwrap_or("—".into()),
            t.priority,
            t.notes
        );
        put(buf, area.x, dy + 1, &id, area.width, th.dim());
    } else if t.is_some() {
        put(
            buf,
            area.x,
            dy,
            "computing this target…",
            area.width,
            th.dim(),
        );
    }
    let sky = format!(
        "Sun set {} rise {} · dark {}-{} · Moon {:.0}% rise {} set {}",
        hm(e.sunset.t, site),
        hm(e.sunrise.t, site),
        hm(e.astronomical_dusk.t, site),
        hm(e.astronomical_dawn.t, site),
        e.moon_illumination * 100.0,
        hm(e.moonrise.t, site),
        hm(e.moonset.t, site),
    );
    put(buf, area.x, dy + 2, &sky, area.width, th.text());
    let caution = s
        .sky
        .as_ref()
        .and_then(|k| k.caution.clone())
        .map(|c| format!("☼ NOW: {c}"))
        .or_else(|| {
            row.and_then(|r| r.sun_caution.as_ref())
                .map(|(when, m)| format!("☼ from {} local: {m}", hm(Some(*when), site)))
        });
    if let Some(c) = caution {
        put(buf, area.x, dy + 3, &c, area.width, th.warn());
    }
}

/// The selected target's night in one line that fits 80 columns: its main
/// window, the hours above the altitude limit, its best altitude and
/// airmass, the Moon's distance.
fn target_line(r: &TargetRow, site: &crate::astro::site::Site, min_alt_deg: f64) -> String {
    let nt = &r.night;
    let w = nt
        .main_window()
        .map(|w| format!("{}-{}", hm(Some(w.0), site), hm(Some(w.1), site)))
        .unwrap_or_else(|| "none".into());
    format!(
        "window {} ({:.1} h above {}°) · best {}° airmass {} · Moon {} away",
        w,
        nt.observable_hours,
        num(Some(min_alt_deg), 0),
        num(nt.max_altitude_deg, 0),
        num(nt.min_airmass, 2),
        r.moon_separation_deg
            .map(|m| format!("{m:.0}°"))
            .unwrap_or("—".into()),
    )
}
