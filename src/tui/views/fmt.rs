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

/// A title of `parts` joined by " · " in at most `w` columns: the parts
/// in their order, each one whole or left out (the first always, cut
/// only when it alone is too wide), so that a narrow terminal loses a
/// late part instead of the end of a figure or its unit.
pub fn title_parts(parts: &[String], w: usize) -> String {
    let mut out = String::new();
    let mut n = 0;
    for p in parts {
        let len = p.chars().count();
        if out.is_empty() {
            out.push_str(p);
            n = len;
        } else if n + 3 + len <= w {
            out.push_str(" · ");
            out.push_str(p);
            n += 3 + len;
        }
    }
    out
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

/// A report's notes (`items`, each a sentence or more) on at most `n`
/// lines of `w` columns: all of them whole, wrapped, when they fit; else
/// those that fit whole above the last line, then the next one as far as
/// it goes, ending with "(+K more: m)" for the K after it, or "(m:
/// whole)" when it is the last (the key `m` opens them all, wrapped).
pub fn note_lines(items: &[String], w: usize, n: usize) -> Vec<String> {
    if n == 0 || items.is_empty() {
        return Vec::new();
    }
    let wrapped: Vec<Vec<String>> = items.iter().map(|t| wrap(t, w)).collect();
    if wrapped.iter().map(Vec::len).sum::<usize>() <= n {
        return wrapped.concat();
    }
    let mut lines: Vec<String> = Vec::new();
    let mut shown = 0;
    for l in &wrapped {
        if lines.len() + l.len() > n - 1 {
            break;
        }
        lines.extend(l.iter().cloned());
        shown += 1;
    }
    // Not all fit, so the note `shown` is cut: its lines up to the last,
    // then as much as leaves room for the mark.
    let rest = items.len() - shown - 1;
    let mark = if rest > 0 {
        format!(" (+{rest} more: m)")
    } else {
        " (m: whole)".to_string()
    };
    let left = n - lines.len();
    let part = &wrapped[shown];
    lines.extend(part.iter().take(left - 1).cloned());
    let tail = part[(left - 1).min(part.len())..].join(" ");
    let room = w.saturating_sub(mark.chars().count());
    let head: String = if tail.chars().count() > room {
        // Cut at the last word that fits whole, when there is one.
        let chars: Vec<char> = tail.chars().collect();
        let k = room.saturating_sub(1);
        let mut kept: String = chars[..k].iter().collect();
        if chars.get(k) != Some(&' ')
            && let Some(i) = kept.rfind(' ')
        {
            kept.truncate(i);
        }
        format!("{}…", kept.trim_end())
    } else {
        tail
    };
    lines.push(format!("{head}{mark}"));
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn titles_leave_out_whole_parts() {
        let p = |v: &[&str]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>();
        let parts = p(&["Parallax", "◆ A", "ϖ 1.0 mas", "2026-12-01 to 2029-05-31"]);
        assert_eq!(
            title_parts(&parts, 80),
            "Parallax · ◆ A · ϖ 1.0 mas · 2026-12-01 to 2029-05-31"
        );
        assert_eq!(title_parts(&parts, 40), "Parallax · ◆ A · ϖ 1.0 mas");
        // A later part that fits after one that does not is kept.
        let parts = p(&["T", "a very long middle part", "end"]);
        assert_eq!(title_parts(&parts, 12), "T · end");
    }

    #[test]
    fn notes_whole_when_they_fit_else_cut_with_the_key() {
        let p = |v: &[&str]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>();
        // Both whole on two lines.
        assert_eq!(
            note_lines(&p(&["first note", "second note"]), 20, 2),
            p(&["first note", "second note"])
        );
        // Three notes on two lines: the first whole, the second cut with
        // the count of the one after it.
        assert_eq!(
            note_lines(&p(&["first note", "second note is long", "third"]), 30, 2),
            p(&["first note", "second note is… (+1 more: m)"])
        );
        // One note too long for its lines: its start, and the key.
        assert_eq!(
            note_lines(
                &p(&["one two three four five six seven eight nine ten"]),
                20,
                2
            ),
            p(&["one two three four", "five six… (m: whole)"])
        );
        // One line: the first note's start and how many follow.
        assert_eq!(
            note_lines(&p(&["alpha beta", "gamma"]), 30, 1),
            p(&["alpha beta (+1 more: m)"])
        );
        assert!(note_lines(&[], 30, 2).is_empty());
    }
}
