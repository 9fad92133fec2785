//! Phase: a pulsator's phase coverage over the coming nights (from
//! `PulsatorMethod::analyse`), night by night, with the planned visits and what
//! the points buy; a field (or a star of one) as one unit, from
//! `Settings::field_report` as `rung phase --field`.

use crate::tui::state::{
    FIELD_EXTRA_ROWS, MethodBody, State, View, detail_offset, detail_rows, phase_extra_rows,
};
use crate::tui::views::fmt::{hm, note_lines, num, pct, put, title_parts};
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
    let r = match super::method_report(s, area, buf, "Phase", "computing the phase coverage…") {
        Some(MethodBody::Phase(r)) => r,
        Some(MethodBody::Field(r)) => {
            let star = (r.field != name).then_some(name.as_str());
            return render_field(s, area, buf, r, star);
        }
        _ => return,
    };
    let e = &r.star.ephemeris;
    put(
        buf,
        area.x,
        area.y,
        &title_parts(
            &[
                "Phase".to_string(),
                format!("∿ {name}"),
                format!("P {:.4} d", e.period_d),
                format!(
                    "{} to {}",
                    r.windows.first().map_or(s.settings.from, |w| w.night),
                    r.windows.last().map_or(s.settings.to, |w| w.night)
                ),
                s.settings.instrument().name.clone(),
            ],
            area.width as usize,
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
    if let Some((n, st)) = note_line(&r.cautions, &r.notes, area.width as usize, th) {
        put(buf, area.x, fy + 2, &n, area.width, st);
    }
    scroll_mark(s, area, fy + 1, off, rows, r.windows.len(), buf);
}

/// Every caution (marked ☼) and note of a report, cautions first: what the
/// notes window (`m`) shows.
pub fn all_notes(cautions: &[String], notes: &[String]) -> Vec<String> {
    cautions
        .iter()
        .map(|c| format!("☼ {c}"))
        .chain(notes.iter().cloned())
        .collect()
}

/// The view's note line in `width` columns: the first caution, else the first
/// note; when there are more, it ends in `(+N more: m)` (the key opens them
/// all, wrapped).
fn note_line(
    cautions: &[String],
    notes: &[String],
    width: usize,
    th: &crate::tui::theme::Theme,
) -> Option<(String, ratatui::style::Style)> {
    let st = if cautions.is_empty() {
        th.dim()
    } else {
        th.warn()
    };
    note_lines(&all_notes(cautions, notes), width, 1)
        .pop()
        .map(|l| (l, st))
}

/// A short label of a field-distance term for the foot line (the names are
/// the library's; the CLI and --json give them in full).
fn term_label(name: &str) -> String {
    let n = name.to_lowercase();
    let short = if n.starts_with("period–luminosity scatter")
        || n.starts_with("period-luminosity scatter")
    {
        "PL"
    } else if n.starts_with("mean magnitude") {
        "m̄"
    } else if n.starts_with("relation zero point") {
        "zp"
    } else if n.starts_with("relation slope") {
        "slp"
    } else if n.starts_with("relation γ") {
        "γ"
    } else if n.starts_with("metallicity") {
        "[Fe/H]"
    } else if n.starts_with("extinction") {
        "A"
    } else if n.starts_with("calibration") {
        "cal"
    } else {
        return name.split_whitespace().next().unwrap_or(name).to_string();
    };
    short.to_string()
}

/// Draw a field (host galaxy or cluster) as one unit: its pointings, its
/// stars with the points each gets, and the field's distance with its terms
/// (`Settings::field_report`, as `rung phase --field`). `star`: the member the
/// Roster selected, marked in the list.
fn render_field(
    s: &State,
    area: Rect,
    buf: &mut Buffer,
    r: &crate::ladder::field::FieldReport,
    star: Option<&str>,
) {
    let th = &s.theme;
    let visits: usize = r.pointings.iter().map(|p| p.epochs.len()).sum();
    put(
        buf,
        area.x,
        area.y,
        &title_parts(
            &[
                "Phase".to_string(),
                format!("◎ {}", r.field),
                format!("{} stars", r.stars.len()),
                format!(
                    "{} pointing{}",
                    r.pointings.len(),
                    if r.pointings.len() == 1 { "" } else { "s" }
                ),
                format!("{} to {}", s.settings.from, s.settings.to),
                s.settings.instrument().name.clone(),
            ],
            area.width as usize,
        ),
        area.width,
        th.title(),
    );
    // What the field costs, and its pointings with the star each one's
    // exposures are sized for.
    let pr = &r.prediction;
    let pts: Vec<String> = r
        .pointings
        .iter()
        .map(|p| {
            if r.pointings.len() == 1 {
                format!(
                    "{} {}★, exposures for {} ({})",
                    p.target,
                    p.stars.len(),
                    p.faintest.as_deref().unwrap_or("-"),
                    num(p.faintest_mag, 2)
                )
            } else {
                format!("{} {}★ {}", p.target, p.stars.len(), p.epochs.len())
            }
        })
        .collect();
    put(
        buf,
        area.x,
        area.y + 1,
        &format!(
            "{visits} visits · {} h · {} · {}",
            num(Some(pr.hours_needed), 1),
            pr.verdict.text(),
            pts.join(" · ")
        ),
        area.width,
        th.text(),
    );
    let head = format!(
        "{:<12} {:>7} {:>2} {:>6} {:>4} {:>3} {:>5} {:>4} {:>6} {:>7} {:>5}",
        "star", "P_d", "bd", "mean", "amp", "pts", "bins", "snr", "σm̄", "μ", "w"
    );
    put(buf, area.x, area.y + 2, &head, area.width, th.header());
    // The distance, its own terms, its shared terms and a note.
    let foot = 3 + FIELD_EXTRA_ROWS as u16;
    let rows = detail_rows(View::Phase, area.height).saturating_sub(FIELD_EXTRA_ROWS);
    let len = r.stars.len();
    let at = star.and_then(|n| r.stars.iter().position(|x| x.name == n));
    // The selected star in sight unless the list was scrolled on purpose.
    let want = match at {
        Some(i) if s.detail_scroll == 0 && i >= rows => i + 1 - rows,
        _ => s.detail_scroll,
    };
    let off = detail_offset(want, rows, len);
    let fy = area.y + area.height - foot;
    for (k, x) in r.stars.iter().enumerate().skip(off).take(rows) {
        let y = area.y + 3 + (k - off) as u16;
        let line = format!(
            "{:<12} {:>7} {:>2} {:>6} {:>4} {:>3} {:>5} {:>4} {:>6} {:>7} {:>5}{}",
            x.name,
            num(Some(x.period_d), 3),
            x.band,
            num(x.mean_mag, 2),
            num(Some(x.amplitude_mag), 2),
            x.points,
            format!("{}/{}", x.bins_covered, r.bins),
            num(x.snr_lowest, 0),
            num(x.sigma_mean_mag, 3),
            num(x.distance_modulus_mag, 3),
            num(Some(x.weight), 3),
            x.excluded
                .as_ref()
                .map(|w| format!(" left out: {w}"))
                .unwrap_or_default()
        );
        let st = if Some(k) == at {
            th.selected()
        } else if x.excluded.is_some() {
            th.dim()
        } else {
            th.text()
        };
        put(buf, area.x, y, &line, area.width, st);
    }
    let terms = |d: &crate::ladder::field::FieldDistance, shared: bool| {
        d.error_terms
            .iter()
            .filter(|t| t.shared == shared)
            .map(|t| format!("{} {}", term_label(&t.name), num(Some(t.sigma_mag), 3)))
            .collect::<Vec<_>>()
            .join("  ")
    };
    // Which zero point each modulus stands on: the relation's published one
    // here; the anchors' (rung ladder's) on the next line when they fix it.
    let l0 = match (&r.anchored, &r.anchored_why) {
        (Some(a), _) => format!(
            "anchors' zp (rung ladder): μ {} ± {} · {} kpc · σd/d {}",
            num(Some(a.distance_modulus_mag), 3),
            num(Some(a.sigma_mu_mag), 3),
            num(Some(a.distance_pc / 1000.0), 1),
            pct(a.distance_precision_pct, 2)
        ),
        (None, Some(_)) => {
            "anchors' zp: none (no anchor of the programme fixes the relation)".to_string()
        }
        (None, None) => String::new(),
    };
    let (l1, l2, l3) = match &r.distance {
        Some(d) => (
            format!(
                "published zp: μ {} ± {} · {} kpc · σd/d {} (floor {}{})",
                num(Some(d.distance_modulus_mag), 3),
                num(Some(d.sigma_mu_mag), 3),
                num(Some(d.distance_pc / 1000.0), 1),
                pct(d.distance_precision_pct, 2),
                pct(d.floor_pct, 2),
                r.goal_pct
                    .map(|g| format!(", goal {}", pct(g, 1)))
                    .unwrap_or_default(),
            ),
            format!("σμ own: {}", terms(d, false)),
            format!("σμ shared: {}", terms(d, true)),
        ),
        None => (
            "no field distance: no star has a mean magnitude from these visits".to_string(),
            String::new(),
            String::new(),
        ),
    };
    put(buf, area.x, fy, &l1, area.width, th.text());
    put(buf, area.x, fy + 1, &l0, area.width, th.text());
    put(buf, area.x, fy + 2, &l2, area.width, th.dim());
    put(buf, area.x, fy + 3, &l3, area.width, th.dim());
    // The scroll mark, when the stars do not fit, takes the note's right end.
    let mark_w = if len > rows { 32 } else { 0 };
    let note = note_line(
        &r.cautions,
        &r.notes,
        area.width.saturating_sub(mark_w) as usize,
        th,
    );
    if let Some((n, st)) = note {
        put(
            buf,
            area.x,
            fy + 4,
            &n,
            area.width.saturating_sub(mark_w),
            st,
        );
    }
    scroll_mark(s, area, fy + 4, off, rows, len, buf);
}
