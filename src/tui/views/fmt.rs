//! Small text helpers shared by the views (formatting only).

use crate::astro::site::Site;
use crate::astro::time::Instant;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;

/// Local HH:MM of an instant at a site, or "—".
pub fn hm(t: Option<Instant>, site: &Site) -> String {
    t.map(|t| crate::output::clock_hm(t, &site.timezone))
        .unwrap_or_else(|| "—".into())
}

/// UTC HH:MM.
pub fn hm_utc(t: Instant) -> String {
    crate::output::clock_hm(t, &chrono::Utc)
}

/// Right ascension in hours, minutes, seconds.
pub fn ra_text(ra_deg: f64) -> String {
    let s = (ra_deg.rem_euclid(360.0) / 15.0 * 3600.0).round() as i64 % 86_400;
    format!("{:02}:{:02}:{:02}", s / 3600, s / 60 % 60, s % 60)
}

/// Declination in degrees, arcminutes, arcseconds.
pub fn dec_text(dec_deg: f64) -> String {
    let sign = if dec_deg < 0.0 { '-' } else { '+' };
    let s = (dec_deg.abs() * 3600.0).round() as i64;
    format!("{sign}{:02}:{:02}:{:02}", s / 3600, s / 60 % 60, s % 60)
}

/// A number with `dp` decimals, or "—" when it has no finite value (the
/// output layer's rules: `crate::output::fixed`).
pub fn num(v: Option<f64>, dp: usize) -> String {
    v.and_then(|x| crate::output::fixed(x, dp))
        .unwrap_or_else(|| "—".into())
}

/// A percentage with `dp` decimals ("2.63%"), or "—" when it has no finite
/// value (a method that proposes no epochs predicts none).
pub fn pct(v: f64, dp: usize) -> String {
    match crate::output::fixed(v, dp) {
        Some(t) => format!("{t}%"),
        None => "—".into(),
    }
}

/// A distance goal as every view writes it: "3%", "2.5%" (one decimal at
/// most, as the Roster's progress column and `rung budget` show it).
pub fn goal(g: f64) -> String {
    match crate::output::fixed(g, 1) {
        Some(t) => format!("{}%", t.strip_suffix(".0").unwrap_or(&t)),
        None => "—".into(),
    }
}

/// Write `text` at (x, y) cut to `w` cells; returns the column after it.
/// Control and bidirectional formatting characters (from a target's name or
/// notes) are shown as escapes (`crate::output::one_line`).
pub fn put(buf: &mut Buffer, x: u16, y: u16, text: &str, w: u16, style: Style) -> u16 {
    if w == 0 {
        return x;
    }
    buf.set_stringn(x, y, crate::output::one_line(text), w as usize, style)
        .0
}

/// `s` in at most `w` columns keeping its end (a path's most telling
/// part): "…" and the last `w` − 1 characters when it is longer.
pub fn fit_end(s: &str, w: usize) -> String {
    let n = s.chars().count();
    if n <= w {
        return s.to_string();
    }
    if w == 0 {
        return String::new();
    }
    let tail: String = s.chars().skip(n - (w - 1)).collect();
    format!("…{tail}")
}

/// Pad or cut `s` to exactly `w` characters.
pub fn fit(s: &str, w: usize) -> String {
    let n = s.chars().count();
    if n > w {
        let mut c: String = s.chars().take(w.saturating_sub(1)).collect();
        if w > 0 {
            c.push('…');
        }
        c
    } else {
        format!("{s}{}", " ".repeat(w - n))
    }
}

/// Right-align `s` in `w` characters.
pub fn rfit(s: &str, w: usize) -> String {
    let n = s.chars().count();
    if n >= w {
        fit(s, w)
    } else {
        format!("{}{s}", " ".repeat(w - n))
    }
}

/// A centred rectangle of at most `w × h` inside `area`.
pub fn centered(area: Rect, w: u16, h: u16) -> Rect {
    let w = w.min(area.width);
    let h = h.min(area.height);
    Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    )
}

/// Words cut into lines of at most `w` characters (a word longer than a
/// line is cut where the line ends).
pub fn wrap(text: &str, w: usize) -> Vec<String> {
    let w = w.max(8);
    let mut lines = Vec::new();
    let mut cur = String::new();
    for word in text.split(' ') {
        let mut word = word.to_string();
        while word.chars().count() > w {
            if !cur.is_empty() {
                lines.push(std::mem::take(&mut cur));
            }
            let head: String = word.chars().take(w).collect();
            word = word.chars().skip(w).collect();
            lines.push(head);
        }
        if cur.chars().count() + word.chars().count() + 1 > w && !cur.is_empty() {
            lines.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(&word);
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    lines
}

/// [`wrap`] onto at most `n` lines of `w`: when more would follow, the
/// last line ends with "…" (the command line prints the text whole).
pub fn wrap_at_most(text: &str, w: usize, n: usize) -> Vec<String> {
    let mut lines = wrap(text, w);
    if lines.len() > n {
        lines.truncate(n);
        if let Some(l) = lines.last_mut() {
            let kept: String = l.chars().take(w.saturating_sub(1)).collect();
            *l = format!("{}…", kept.trim_end());
        }
    }
    lines
}

/// A form's error under its fields: `text` wrapped to the form's width,
/// at most two lines (the blank line above the last and the last), ending
/// on line `last_y` of `inner`.
pub fn put_form_error(buf: &mut Buffer, inner: Rect, last_y: u16, text: &str, style: Style) {
    let lines = wrap(text, inner.width as usize);
    let first = last_y.saturating_sub(lines.len().clamp(1, 2) as u16 - 1);
    for (i, l) in lines.iter().take(2).enumerate() {
        put(buf, inner.x, first + i as u16, l, inner.width, style);
    }
}
