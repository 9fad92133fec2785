//! Season: observable hours of each target, night by night (or week by week).

use crate::tui::state::{State, scroll_offset};
use crate::tui::theme::{hours_glyph, kind_glyph};
use crate::tui::views::fmt::{fit, put};
use chrono::{Datelike, NaiveDate};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

const NAME_W: u16 = 16;

/// Draw the Season view.
pub fn render(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    if area.height < 5 || area.width < NAME_W + 10 {
        put(
            buf,
            area.x,
            area.y,
            "Season: window too small",
            area.width,
            th.dim(),
        );
        return;
    }
    let key = s.season_key();
    let step = key.step_days;
    let title = format!(
        "Season · hours above {:.0}° with Sun below {:.0}° · from {}, every {}",
        key.limits.min_alt_deg,
        key.limits.sun_alt_deg,
        key.from,
        if step == 1 { "night" } else { "7 nights" },
    );
    put(buf, area.x, area.y, &title, area.width, th.title());
    let ncol = (key.nights as u16).min(area.width - NAME_W);
    let cx = area.x + NAME_W;
    // Month labels where a month begins, each in the longest form that fits
    // before the next: January carries the year ("Jan 2027", "2027", "'27").
    let starts: Vec<(u16, NaiveDate)> = (0..ncol)
        .filter_map(|c| {
            let d = key.from + chrono::Days::new((c as u32 * step) as u64);
            (c == 0 || d.day() <= step).then_some((c, d))
        })
        .collect();
    for (i, (c, d)) in starts.iter().enumerate() {
        let room = starts.get(i + 1).map(|n| n.0).unwrap_or(ncol) - c;
        let forms: Vec<String> = if d.month() == 1 {
            vec![
                d.format("%b %Y").to_string(),
                d.format("%Y").to_string(),
                d.format("'%y").to_string(),
            ]
        } else {
            vec![
                d.format("%b").to_string(),
                d.format("%b").to_string()[..1].to_string(),
            ]
        };
        // A label needs a blank column after it unless it reaches the strip's end.
        if let Some(label) = forms.iter().find(|f| {
            let n = f.chars().count() as u16;
            n < room || (i + 1 == starts.len() && n <= room)
        }) {
            put(buf, cx + c, area.y + 1, label, ncol - c, th.header());
        }
    }
    let rows = (area.height - 3) as usize;
    let off = scroll_offset(s.sel, rows);
    let fresh = s.season.key.as_ref() == Some(&key);
    for (k, idx) in s.order.iter().skip(off).take(rows).enumerate() {
        let t = &s.targets[*idx];
        let y = area.y + 2 + k as u16;
        let sel = off + k == s.sel;
        let name = fit(
            &format!("{} {}", kind_glyph(t.kind), t.name),
            NAME_W as usize - 1,
        );
        put(
            buf,
            area.x,
            y,
            &name,
            NAME_W,
            if sel { th.selected() } else { th.text() },
        );
        match s.season.hours.get(&t.name).filter(|_| fresh) {
            Some(h) => {
                for (c, v) in h.iter().take(ncol as usize).enumerate() {
                    if let Some(cell) = buf.cell_mut((cx + c as u16, y)) {
                        cell.set_char(hours_glyph(*v));
                        cell.set_style(th.hours(*v));
                    }
                }
            }
            None => {
                put(buf, cx, y, "computing…", ncol, th.dim());
            }
        }
    }
    // Legend and the selected target's best night.
    let ly = area.y + area.height - 1;
    let mut legend = "· 0 h ▁ <1 ▃ 1-3 ▅ 3-5 ▇ 5-7 █ ≥7 h".to_string();
    if let Some(t) = s.selected()
        && let Some(h) = s.season.hours.get(&t.name).filter(|_| fresh)
        && let Some((i, best)) = h
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.partial_cmp(b.1).unwrap_or(std::cmp::Ordering::Equal))
    {
        let d = key.from + chrono::Days::new((i as u32 * step) as u64);
        if *best > 0.0 {
            legend.push_str(&format!("   {}: most {best:.1} h on {d}", t.name));
        } else {
            legend.push_str(&format!("   {}: not observable in this span", t.name));
        }
    }
    if !s.season.pending.is_empty() {
        legend.push_str(&format!("   computing {}…", s.season.pending.len()));
    }
    if let Some(e) = &s.season.error {
        put(
            buf,
            area.x,
            ly,
            &format!("season not computed: {e}"),
            area.width,
            th.warn(),
        );
    } else {
        put(buf, area.x, ly, &legend, area.width, th.dim());
    }
}
