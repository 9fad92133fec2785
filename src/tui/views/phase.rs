//! Phase: a pulsator's phase coverage over the coming nights (from
//! `PulsatorMethod::analyse`), night by night, with the planned visits and what
//! the points buy.

use crate::tui::state::{MethodBody, State, View, detail_offset, detail_rows, phase_extra_rows};
use crate::tui::views::fmt::{hm, num, pct, put};
use crate::tui::views::scroll_mark;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Draw the Phase view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 8 || area.width < 40 {
        put(
            buf,
            area.x,
            area.y,
            "Phase: window too small",
            area.width,
            th.dim(),
        );
        return;
    }
    let name = s.selected().map(|t| t.name.clone()).unwrap_or_default();
    let Some(MethodBody::Phase(r)) =
        super::method_report(s, area, buf, "Phase", "computing the phase coverage…")
    else {
        return;
    };
    let e = &r.star.ephemeris;
    put(
        buf,
        area.x,
        area.y,
        &format!(
            "Phase · ∿ {name} · P {:.4} d · {} to {} · {}",
            e.period_d,
            r.windows.first().map_or(s.settings.from, |w| w.night),
            r.windows.last().map_or(s.settings.to, |w| w.night),
            s.settings.instrument().name
        ),
        area.width,
        th.title(),
    );
    // Bin coverage of the plan.
    let p = &r.plan;
    let mut bins = String::new();
    for b in 0..p.bins {
        bins.push(if p.missing_bins.contains(&b) {
            '·'
        } else {
            '█'
        });
    }
    let stale = if r.stale { "STALE" } else { "fresh" };
    let line = format!(
        "bins [{bins}] {}/{} in {} nights · σφ {:.4}→{:.4} cycles ({stale})",
        p.bins_covered,
        p.bins,
        p.nights_needed(),
        r.phase_sigma_start,
        r.phase_sigma
    );
    put(
        buf,
        area.x,
        area.y + 1,
        &line,
        area.width,
        if r.stale { th.warn() } else { th.text() },
    );
    // Night rows: window and the phases it reaches, on a 0..1 strip.
    let strip_x = area.x + 24;
    let sw = area.width.saturating_sub(25).max(10);
    let head = format!(
        "{:<10} {:<12} φ 0{}1",
        "night",
        "window",
        " ".repeat(sw as usize - 3)
    );
    put(buf, area.x, area.y + 2, &head, area.width, th.header());
    for q in [0.25, 0.5, 0.75] {
        let c = (q * sw as f64) as u16;
        put(buf, strip_x + c, area.y + 2, "╷", 1, th.header());
    }
    let foot = 3u16;
    let extra = phase_extra_rows(r);
    let rows = detail_rows(View::Phase, area.height).saturating_sub(extra);
    let off = detail_offset(s.detail_scroll, rows, r.windows.len());
    let fy = area.y + area.height - foot;
    // The refitted ephemeris and the period search, above the footer.
    let mut ey = fy - extra as u16;
    if let Some(u) = &r.star.ephemeris_update {
        let first = u.progress.first().map(|p| p.period_err_d);
        let line = format!(
            "O−C {} max · P {:.6}±{:.6} d (was {}) · E ±{:.4} d{}",
            u.points.len(),
            u.new.period_d,
            u.new.period_err_d,
            u.old.period_d,
            u.new.epoch_err_d,
            first
                .map(|f| format!(" · σP {f:.0e}→{:.0e}", u.new.period_err_d))
                .unwrap_or_default()
        );
        put(buf, area.x, ey, &line, area.width, th.text());
        ey += 1;
    }
    if let Some(d) = &r.discovery {
        let line = format!(
            "search {:.4}–{:.4} d · {} obs/{:.0} d · σP {:.0e}–{:.0e} d · {}/{}{}",
            d.period_min_d,
            d.period_max_d,
            d.bjd_tdb.len(),
            d.span_d,
            d.period_err_at_min_d,
            d.period_err_at_max_d,
            d.recovered,
            d.trials,
            if d.alias_free {
                " · alias-free"
            } else {
                " · ALIASED"
            }
        );
        put(
            buf,
            area.x,
            ey,
            &line,
            area.width,
            if d.alias_free { th.text() } else { th.warn() },
        );
        let alias = d
            .alias_peaks
            .iter()
            .find(|p| !p.true_peak)
            .map(|p| format!(" alias {:.4} d {:.0}%", p.period_d, 100.0 * p.relative))
            .unwrap_or_default();
        let head = "pgram ";
        let w = (area.width as usize)
            .saturating_sub(head.len() + alias.chars().count())
            .max(4);
        let n = d.periodogram_power.len();
        let bars = ['▁', '▂', '▃', '▄', '▅', '▆', '▇', '█'];
        let spark: String = (0..if n == 0 { 0 } else { w })
            .map(|c| {
                let a = c * n / w;
                let b = ((c + 1) * n / w).max(a + 1).min(n);
                let v = d.periodogram_power[a.min(n - 1)..b.max(a.min(n - 1) + 1)]
                    .iter()
                    .cloned()
                    .fold(0.0, f64::max);
                bars[((v * 7.0).round() as usize).min(7)]
            })
            .collect();
        put(
            buf,
            area.x,
            ey + 1,
            &format!("{head}{spark}{alias}"),
            area.width,
            th.dim(),
        );
    }
    for (k, w) in r.windows.iter().skip(off).take(rows).enumerate() {
        let y = area.y + 3 + k as u16;
        let label = format!(
            "{:<10} {}-{}",
            w.night.format("%a %b %d"),
            hm(Some(w.start), s.site()),
            hm(Some(w.end), s.site())
        );
        put(buf, area.x, y, &label, 24, th.text());
        let mark = |buf: &mut Buffer, a: f64, b: f64| {
            let c0 = (a * sw as f64).floor() as u16;
            let c1 = ((b * sw as f64).ceil() as u16).min(sw);
            for c in c0..c1.max(c0 + 1).min(sw) {
                if let Some(cell) = buf.cell_mut((strip_x + c, y)) {
                    cell.set_char('━');
                    cell.set_style(th.series_target());
                }
            }
        };
        for c in 0..sw {
            if let Some(cell) = buf.cell_mut((strip_x + c, y)) {
                cell.set_char('·');
                cell.set_style(th.dim());
            }
        }
        if w.span_cycles >= 1.0 {
            mark(buf, 0.0, 1.0);
        } else if w.phase_end >= w.phase_start {
            mark(buf, w.phase_start, w.phase_end);
        } else {
            mark(buf, w.phase_start, 1.0);
            mark(buf, 0.0, w.phase_end);
        }
        for v in p
            .visits
            .iter()
            .filter(|v| v.night == w.night && v.time >= w.start && v.time <= w.end)
        {
            let c = ((v.phase * sw as f64) as u16).min(sw - 1);
            if let Some(cell) = buf.cell_mut((strip_x + c, y)) {
                cell.set_char('◆');
                cell.set_style(th.now());
            }
        }
    }
    if r.windows.is_empty() {
        put(
            buf,
            area.x,
            area.y + 3,
            "no observable window in these nights",
            area.width,
            th.notice(),
        );
    }
    // What the points buy.
    let buy = match (&r.prediction, &r.budget) {
        (Some(pr), b) => format!(
            "σd/d {}{} · {} h · {}{}",
            pct(pr.distance_precision_pct, 2),
            b.as_ref()
                .map(|b| format!(
                    " (floor {}, {} pc)",
                    pct(b.floor_pct, 2),
                    num(Some(b.distance_pc), 0)
                ))
                .unwrap_or_default(),
            num(Some(pr.hours_needed), 1),
            pr.verdict.text(),
            b.as_ref()
                .map(|b| format!(
                    " · cal {:.3} mag{}",
                    b.sigma_cal_mag,
                    if r.mean.as_ref().is_some_and(|m| m.from == "template") {
                        " · mean by template"
                    } else {
                        ""
                    }
                ))
                .unwrap_or_default()
        ),
        (None, _) => match r.notes.iter().find_map(|n| n.strip_suffix(": no distance")) {
            // No relation applies (period outside its range, no class).
            Some(why) => format!("no distance: {why}"),
            None => "no distance prediction (the star needs mean_mag)".into(),
        },
    };
    put(buf, area.x, fy, &buy, area.width, th.text());
    put(
        buf,
        area.x,
        fy + 1,
        "━ phases reached  ◆ planned visit  · not reached",
        area.width,
        th.dim(),
    );
    let note = r
        .cautions
        .first()
        .map(|c| (format!("☼ {c}"), th.warn()))
        .or_else(|| r.notes.first().map(|n| (n.clone(), th.dim())));
    if let Some((n, st)) = note {
        put(buf, area.x, fy + 2, &n, area.width, st);
    }
    scroll_mark(s, area, fy + 1, off, rows, r.windows.len(), buf);
}
