//! Ladder: the programme's distance ladder as `rung ladder` gives it
//! (`ladder::chain::report`, the same report): each rung's distances with
//! their σ split into own and shared, the end point's error budget by rung
//! with each rung's largest term, what one more hour on each target buys at
//! the end point, and the best next hours.

use crate::ladder::chain::{LadderReport, Rung};
use crate::tui::state::{State, detail_offset, detail_rows};
use crate::tui::views::fmt::{fit, pct, put, rfit};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Steps listed under "Best next hour".
const NEXT_ROWS: usize = crate::tui::state::LADDER_NEXT_ROWS as usize;

/// A number with `dp` decimals, or "—" (the output layer's rules).
fn n(v: f64, dp: usize) -> String {
    crate::output::fixed(v, dp).unwrap_or_else(|| "—".into())
}

/// The rung column of a calibrator's M_B row.
pub const MB_ROW: &str = "M_B (calib)";

/// The chain's rows: (section, name, μ, σ, own %, shared %, σd/d %, gain
/// %/h), then one row per calibrator with the peak absolute magnitude it
/// calibrates: (`MB_ROW`, name, M_B, σ, own σ, host σ in mag, —, —), the
/// numbers of `rung ladder`'s `calibrators` and the Chase view.
pub fn chain_rows(r: &LadderReport) -> Vec<[String; 8]> {
    let mb = r.calibrators.iter().map(|c| {
        [
            MB_ROW.to_string(),
            c.target.clone(),
            n(c.peak_abs_mag, 3),
            n(c.sigma_mag, 3),
            n(c.sigma_own_mag, 3),
            n(c.sigma_host_mag, 3),
            "—".to_string(),
            "—".to_string(),
        ]
    });
    r.chain_in_order()
        .into_iter()
        .map(|d| {
            let gain = r
                .marginal_of_row(&d.name)
                .map_or("—".to_string(), |g| crate::output::small_gain(g, 3));
            [
                d.section.text().to_string(),
                d.name.clone(),
                n(d.modulus_mag, 3),
                n(d.sigma_mag, 3),
                pct(d.own_pct, 2),
                pct(d.shared_pct, 2),
                pct(d.distance_pct, 2),
                gain,
            ]
        })
        .chain(mb)
        .collect()
}

/// Column widths of the chain (the name takes what is left).
const W: [usize; 8] = [11, 0, 7, 5, 6, 7, 6, 7];

fn line(v: &[String; 8], name_w: usize) -> String {
    v.iter()
        .enumerate()
        .map(|(i, t)| match i {
            0 => fit(t, W[0]),
            1 => fit(t, name_w),
            _ => rfit(t, W[i]),
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// The end point in one line: its σ (and H0 with its σ when it is H0),
/// own and shared.
pub fn end_point_line(r: &LadderReport) -> String {
    let b = &r.end_point;
    let own = 100.0 * crate::ladder::DIST_FRAC_PER_MAG * b.own_sigma_mag;
    let shared = 100.0 * crate::ladder::DIST_FRAC_PER_MAG * b.shared_sigma_mag;
    let head = match (&b.end_point, r.h0_km_s_mpc) {
        (crate::ladder::chain::EndPoint::Hubble, Some(h)) => format!(
            "H0 {} ± {} km/s/Mpc",
            n(h, 2),
            n(h * b.distance_pct / 100.0, 2)
        ),
        _ => format!(
            "{}: μ {} ± {}",
            r.end_point_text,
            n(b.value_mag, 3),
            n(b.sigma_mag, 3)
        ),
    };
    format!(
        "End point {head} · σ {} · own {} | shared {}",
        pct(b.distance_pct, 2),
        pct(own, 2),
        pct(shared, 2)
    )
}

/// One rung's line of the end point's budget: its σd/d, its share of the
/// variance and its largest term.
pub fn rung_line(r: &LadderReport, rung: Rung) -> Option<String> {
    let s = r.end_point.by_rung.iter().find(|s| s.rung == rung)?;
    let top = r
        .end_point
        .by_term
        .iter()
        .filter(|t| t.rung == rung)
        .max_by(|a, b| a.variance_fraction.total_cmp(&b.variance_fraction));
    Some(format!(
        "  {} {} {}{}",
        fit(rung.text(), 15),
        rfit(&pct(s.distance_pct, 2), 7),
        rfit(&format!("{}%", n(100.0 * s.variance_fraction, 1)), 6),
        top.map_or(String::new(), |t| format!(
            "  largest: {} {}",
            t.term,
            pct(t.distance_pct, 2)
        ))
    ))
}

/// The hours planned by rung on one line (`rung ladder`'s "Hours planned by
/// rung"; the single pulsators on their own), with their sum.
pub fn hours_line(r: &LadderReport) -> String {
    let mut parts: Vec<String> = r
        .hours_by_rung
        .iter()
        .map(|h| format!("{} {}", h.rung.text(), n(h.hours, 1)))
        .collect();
    if r.pulsator_hours > 0.0 {
        parts.push(format!("pulsators {}", n(r.pulsator_hours, 1)));
    }
    let total: f64 = r.hours_by_rung.iter().map(|h| h.hours).sum::<f64>() + r.pulsator_hours;
    format!("Hours: {} = {} h", parts.join(" · "), n(total, 1))
}

/// One step of the best next hours: the gain, the end point's σd/d after it
/// (before it is the end point's line above) and the hours it takes, then
/// the step (last: a long label is what gets cut at 80 columns).
pub fn next_line(s: &crate::ladder::chain::Ranked) -> String {
    format!(
        "{} %/h  → {} in {} h  {}",
        rfit(&crate::output::small_gain(s.gain_pct_per_hour, 3), 7),
        pct(s.after_pct, 2),
        n(s.step.hours, if s.step.hours < 0.1 { 2 } else { 1 }),
        s.step.label,
    )
}

/// Draw the Ladder view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    let Some(r) = super::programme_view(
        s,
        area,
        buf,
        "Ladder",
        6,
        "building the ladder from every target's plan (this takes a while for parallaxes)…",
        s.ladder_now(),
        "no ladder",
    ) else {
        return;
    };
    put(
        buf,
        area.x,
        area.y + 1,
        &end_point_line(r),
        area.width,
        th.text(),
    );
    let name_w = (area.width as usize)
        .saturating_sub(W.iter().sum::<usize>() + 7)
        .clamp(8, 24);
    let head = [
        // μ on the zero point the anchors fix (`rung ladder`; a field's
        // own, on the published zero point, is in the Phase view).
        "rung", "name", "μ anch", "±", "own", "shared", "σd/d", "+1h %/h",
    ]
    .map(String::from);
    put(
        buf,
        area.x,
        area.y + 2,
        &line(&head, name_w),
        area.width,
        th.header(),
    );
    let rows = chain_rows(r);
    let shown = detail_rows(crate::tui::state::View::Ladder, area.height);
    let off = detail_offset(s.detail_scroll, shown, rows.len());
    for (k, v) in rows.iter().skip(off).take(shown).enumerate() {
        put(
            buf,
            area.x,
            area.y + 3 + k as u16,
            &line(v, name_w),
            area.width,
            th.text(),
        );
    }
    let mut y = area.y + 3 + shown as u16;
    put(
        buf,
        area.x,
        y,
        "Budget by rung (σd/d, share of the variance, largest term)",
        area.width,
        th.header(),
    );
    y += 1;
    for rung in Rung::ALL {
        if let Some(l) = rung_line(r, rung) {
            put(buf, area.x, y, &l, area.width, th.text());
            y += 1;
        }
    }
    put(buf, area.x, y, &hours_line(r), area.width, th.dim());
    let y = area.y + area.height - 1 - NEXT_ROWS as u16;
    put(
        buf,
        area.x,
        y,
        "Best next hour (fall of the end point's σd/d per telescope hour)",
        area.width,
        th.header(),
    );
    if r.next.is_empty() {
        put(
            buf,
            area.x,
            y + 1,
            "  no step helps the end point",
            area.width,
            th.dim(),
        );
    }
    for (k, step) in r.next.iter().take(NEXT_ROWS).enumerate() {
        put(
            buf,
            area.x,
            y + 1 + k as u16,
            &next_line(step),
            area.width,
            th.good(),
        );
    }
}
