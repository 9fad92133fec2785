//! Parallax: the parallax factors in RA and Dec through the coming years
//! (from `ParallaxMethod::plan`), the observable and candidate nights, the
//! chosen epochs, the error of one epoch by term (picked with the detail
//! keys), and the precision they buy.

use crate::tui::keymap::{Action, Scope, keys_for};
use crate::tui::state::{MethodBody, State, View, detail_offset, detail_rows};
use crate::tui::views::chart::Braille;
use crate::tui::views::fmt::{note_lines, num, pct, put, title_parts};
use chrono::Datelike;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// Draw the Parallax view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 12 || area.width < 40 {
        put(
            buf,
            area.x,
            area.y,
            "Parallax: window too small",
            area.width,
            th.dim(),
        );
        return;
    }
    let name = s.selected().map(|t| t.name.clone()).unwrap_or_default();
    let Some(MethodBody::Parallax(p)) = super::method_report(
        s,
        area,
        buf,
        "Parallax",
        "computing the parallax factors and epochs…",
    ) else {
        return;
    };
    put(
        buf,
        area.x,
        area.y,
        &title_parts(
            &[
                "Parallax".to_string(),
                format!("◆ {name}"),
                format!("ϖ {:.1} mas", p.parallax_mas),
                format!(
                    "ellipse {:.1}×{:.1} mas",
                    p.ellipse.semi_major_mas, p.ellipse.semi_minor_mas
                ),
                format!("{} to {}", s.settings.from, s.settings.to),
            ],
            area.width as usize,
        ),
        area.width,
        th.title(),
    );
    let nights = &p.series.nights;
    if nights.is_empty() {
        return;
    }
    let foot = 5u16;
    let label_w = 5u16;
    // Title, strip + epochs + axis, the picked epoch's two lines, footer.
    let chart_h = area.height - 1 - 3 - PICKED_ROWS - foot;
    let cw = area.width - label_w;
    let cx = area.x + label_w;
    let cy = area.y + 1;
    let n = nights.len();
    let col_of = |i: usize| -> u16 { ((i as f64 + 0.5) / n as f64 * cw as f64) as u16 };
    // Factor −1..+1 au on the y axis.
    let dots = chart_h as f64 * 4.0 - 1.0;
    let y_of = |f: f64| -> i64 { ((1.0 - f.clamp(-1.0, 1.0)) / 2.0 * dots).round() as i64 };
    for (v, label) in [(1.0, "+1"), (0.0, " 0"), (-1.0, "-1")] {
        put(
            buf,
            area.x,
            cy + (y_of(v) / 4) as u16,
            &format!("{label} au"),
            label_w,
            th.dim(),
        );
    }
    let zero = (y_of(0.0) / 4) as u16;
    for c in 0..cw {
        if let Some(cell) = buf.cell_mut((cx + c, cy + zero)) {
            cell.set_char('┄');
            cell.set_style(th.dim());
        }
    }
    let mut br = Braille::new(cw, chart_h);
    let dw = br.dots_w();
    for d in 0..dw {
        let i = ((d as f64 + 0.5) / dw as f64 * n as f64) as usize;
        let nf = &nights[i.min(n - 1)];
        br.dot(d as i64, y_of(nf.pf_ra), th.series_target());
        if d % 2 == 0 {
            br.dot(d as i64, y_of(nf.pf_dec), th.series_moon());
        }
    }
    br.render(Rect::new(cx, cy, cw, chart_h), buf);
    // Strip: candidate (large factor, observable), observable, neither.
    let sy = cy + chart_h;
    for c in 0..cw {
        let i0 = (c as f64 / cw as f64 * n as f64) as usize;
        let i1 = (((c + 1) as f64 / cw as f64 * n as f64) as usize)
            .max(i0 + 1)
            .min(n);
        let slice = &nights[i0.min(n - 1)..i1];
        let g = if slice.iter().any(|x| x.candidate) {
            '█'
        } else if slice.iter().any(|x| x.observable) {
            '▒'
        } else {
            '·'
        };
        if let Some(cell) = buf.cell_mut((cx + c, sy)) {
            cell.set_char(g);
            cell.set_style(if g == '█' { th.limit() } else { th.dim() });
        }
    }
    put(buf, area.x, sy, "sky", label_w, th.dim());
    // Epochs; the picked one (the detail keys move it) drawn last, as ◈.
    put(buf, area.x, sy + 1, "epoch", label_w, th.dim());
    let picked = (!p.epochs.is_empty()).then(|| {
        detail_offset(
            s.detail_scroll,
            detail_rows(View::Parallax, area.height),
            p.epochs.len(),
        )
    });
    let order = (0..p.epochs.len())
        .filter(|k| Some(*k) != picked)
        .chain(picked);
    for k in order {
        let e = &p.epochs[k];
        if let Some(night) = e.night
            && let Some(i) = nights.iter().position(|x| x.night == night)
        {
            let c = col_of(i).min(cw - 1);
            if let Some(cell) = buf.cell_mut((cx + c, sy + 1)) {
                if Some(k) == picked {
                    cell.set_char('◈');
                    cell.set_style(th.title());
                } else {
                    cell.set_char('◆');
                    cell.set_style(th.now());
                }
            }
        }
    }
    // Year and month labels.
    let mut last_end = 0u16;
    for (i, nf) in nights.iter().enumerate() {
        let d = nf.night;
        if d.day() != 1 || !(d.month() == 1 || d.month() == 7) {
            continue;
        }
        let c = col_of(i);
        let label = if d.month() == 1 {
            format!("{}", d.year())
        } else {
            "Jul".to_string()
        };
        if c >= last_end && c + label.len() as u16 <= cw {
            put(buf, cx + c, sy + 2, &label, label.len() as u16, th.dim());
            last_end = c + label.len() as u16 + 1;
        }
    }
    // The picked epoch: where and how long, then its error by term, the
    // numbers of `rung parallax` (its table and the json's sigma_terms).
    if let Some(k) = picked {
        let e = &p.epochs[k];
        let line1 = format!(
            "◈ {}/{} {}Z Pα {:+.2} Pδ {:+.2} HA {:+.2}h X {:.2} {:.0} s×{} SNR {:.0}",
            k + 1,
            p.epochs.len(),
            &e.epoch.time.round_to_second().iso()[..16],
            e.pf_ra,
            e.pf_dec,
            e.hour_angle_h,
            e.epoch.airmass,
            e.epoch.exptime_s,
            e.epoch.n_exposures,
            e.epoch.snr
        );
        let line2 = format!(
            "σ {:.2} mas = cent {:.2} ref {:.2} motion {:.2} refr {:.2} floor {:.2} · DCR {:+.2}",
            e.terms.total_mas,
            e.terms.centroid_mas,
            e.terms.reference_mas,
            e.terms.image_motion_mas,
            e.terms.refraction_mas,
            e.terms.floor_mas,
            e.dcr_zenith_mas(p.dcr.mas_per_tanz)
        );
        put(buf, area.x, sy + 3, &line1, area.width, th.text());
        put(buf, area.x, sy + 4, &line2, area.width, th.text());
    }
    // What the epochs buy: σϖ by term (the fit, the DCR bias bound, the
    // relative-to-absolute correction, as `rung parallax`), σμ and the
    // correlation; the distance, epochs, baseline, hours and verdict; the
    // verdict's reason when the goal is not reached, then the notes.
    let fy = area.y + area.height - foot;
    let pr = &p.prediction;
    let (sol, base) = p
        .solution
        .as_ref()
        .map(|x| {
            (
                format!(
                    "σϖ {:.2} mas (fit {:.2}, DCR {:.2}, abs {:.2}) · σμ {:.2} mas/yr · ρ(ϖ,μ) {:+.2}",
                    p.sigma_parallax_total_mas.unwrap_or(x.sigma_parallax_mas),
                    x.sigma_parallax_mas,
                    p.dcr_bias_mas.unwrap_or(0.0).abs(),
                    p.absolute_correction_mas,
                    x.sigma_pm_masyr,
                    x.corr_parallax_pm
                ),
                format!(" over {:.2} yr", x.baseline_yr),
            )
        })
        .unwrap_or_default();
    put(buf, area.x, fy, &sol, area.width, th.text());
    put(
        buf,
        area.x,
        fy + 1,
        &format!(
            "σd/d {} · {} epochs in {} seasons{base} · {} h · {}",
            pct(pr.distance_precision_pct, 2),
            p.epochs.len(),
            p.seasons_available,
            num(Some(pr.hours_needed), 1),
            pr.verdict.text()
        ),
        area.width,
        th.text(),
    );
    for (k, line) in note_lines(&note_items(p), area.width as usize, 2)
        .iter()
        .enumerate()
    {
        put(buf, area.x, fy + 2 + k as u16, line, area.width, th.dim());
    }
    put(
        buf,
        area.x,
        fy + 4,
        &format!(
            "⣿ Pα  ⠂ Pδ  sky █ candidate ▒ observable · not  ◆ chosen epoch  {}/{} ◈",
            keys_for(Scope::Main, Action::DetailDown),
            keys_for(Scope::Main, Action::DetailUp)
        ),
        area.width,
        th.dim(),
    );
}

/// The plan's notes as the view and its notes window (`m`) give them: the
/// verdict's reason first when the goal is not reached ("why: …"), then
/// the notes (the reason not twice).
pub fn note_items(p: &crate::ladder::parallax::ParallaxPlan) -> Vec<String> {
    let pr = &p.prediction;
    let why = (!matches!(pr.verdict, crate::ladder::Verdict::Reachable)
        && !p.verdict_reason.is_empty())
    .then(|| format!("why: {}", p.verdict_reason));
    why.into_iter()
        .chain(pr.notes.iter().filter(|n| **n != p.verdict_reason).cloned())
        .collect()
}

/// Rows the Parallax view gives to the picked epoch (its time and geometry,
/// then its error by term).
pub const PICKED_ROWS: u16 = 2;
