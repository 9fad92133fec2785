//! Overlays: the key help (drawn from the key table), the target form, the
//! site picker and yes/no questions.

use crate::tui::form::{Form, choices, field_hint};
use crate::tui::keymap::Action;
use crate::tui::keymap::{Scope, help_lines, keys_for};
use crate::tui::state::{Question, State};
use crate::tui::views::fmt::{centered, fit, put, wrap};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::{Block, Borders, Clear, Widget};

/// A cleared, bordered window titled `title` over `area`: its inside.
pub(crate) fn frame(title: &str, area: Rect, buf: &mut Buffer, s: &State) -> Rect {
    Clear.render(area, buf);
    let b = Block::default()
        .borders(Borders::ALL)
        .title(format!(" {title} "))
        .title_style(s.theme.title());
    let inner = b.inner(area);
    b.render(area, buf);
    inner
}

/// A window of text: centred in `area`, at most `max_w` wide, `lines`
/// (wrapped already) from its top in `style`, as many as fit above `gap`
/// blank rows and the foot line, and on its last row the foot `foot(shown)`
/// (`shown`: the lines that fit) in `foot_style`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn text_window(
    s: &State,
    area: Rect,
    buf: &mut Buffer,
    title: &str,
    max_w: u16,
    lines: &[String],
    style: ratatui::style::Style,
    gap: u16,
    foot: &dyn Fn(usize) -> String,
    foot_style: ratatui::style::Style,
) {
    let h = (lines.len() as u16 + 3 + gap).min(area.height);
    let inner = frame(title, centered(area, max_w, h), buf, s);
    let shown = inner.height.saturating_sub(1 + gap) as usize;
    for (i, l) in lines.iter().take(shown).enumerate() {
        put(buf, inner.x, inner.y + i as u16, l, inner.width, style);
    }
    put(
        buf,
        inner.x,
        inner.y + inner.height.saturating_sub(1),
        &foot(shown.min(lines.len())),
        inner.width,
        foot_style,
    );
}

/// The help lines: every scope of the key table.
pub fn help_text() -> Vec<(String, String)> {
    let mut out = Vec::new();
    for scope in [
        Scope::Main,
        Scope::Form,
        Scope::Filter,
        Scope::Picker,
        Scope::Question,
    ] {
        out.push((format!("— {} —", scope.title()), String::new()));
        for (k, h) in help_lines(scope) {
            out.push((k, h.to_string()));
        }
    }
    out
}

/// Key help.
pub fn help(s: &State, scroll: u16, area: Rect, buf: &mut Buffer) {
    let r = centered(area, 120, area.height.saturating_sub(2).max(10));
    let inner = frame("Keys (Esc closes, ↑↓ scroll)", r, buf, s);
    let lines = help_text();
    let two = inner.width >= 72;
    let col_w = if two { inner.width / 2 } else { inner.width };
    let per_col = inner.height as usize;
    let start = (scroll as usize).min(lines.len().saturating_sub(1));
    for (i, (k, h)) in lines.iter().skip(start).enumerate() {
        let (col, row) = if two {
            (i / per_col, i % per_col)
        } else {
            (0, i)
        };
        if col > 1 || row >= per_col {
            break;
        }
        let x = inner.x + col as u16 * col_w;
        let y = inner.y + row as u16;
        if h.is_empty() {
            put(buf, x, y, k, col_w, s.theme.title());
        } else {
            let text = format!("{} {h}", fit(k, 11));
            put(buf, x, y, &text, col_w.saturating_sub(1), s.theme.text());
        }
    }
}

/// The target form.
pub fn form(s: &State, f: &Form, area: Rect, buf: &mut Buffer) {
    let vis = f.visible();
    let h = (vis.len() as u16 + 5).min(area.height);
    let r = centered(area, 76, h);
    let title = match &f.editing {
        Some(n) => format!("Edit {n}"),
        None => "New target".to_string(),
    };
    let inner = frame(&title, r, buf, s);
    let rows = inner.height.saturating_sub(3) as usize;
    let off = f.focus.saturating_sub(rows.saturating_sub(1));
    for (k, col) in vis.iter().enumerate().skip(off).take(rows) {
        let y = inner.y + (k - off) as u16;
        let focused = k == f.focus;
        let bad = f.error.as_ref().is_some_and(|e| e.0 == *col);
        let mark = if bad {
            "✗"
        } else if focused {
            "▸"
        } else {
            " "
        };
        let label = format!("{mark}{}", fit(col, 14));
        put(
            buf,
            inner.x,
            y,
            &label,
            15,
            if bad { s.theme.warn() } else { s.theme.text() },
        );
        let v = f.value(col);
        let shown = if choices(col).is_some() {
            format!("◂ {v} ▸")
        } else if focused {
            format!("{v}▏")
        } else {
            v.to_string()
        };
        let vs = if focused {
            s.theme.selected()
        } else {
            s.theme.text()
        };
        let vw = 30u16.min(inner.width.saturating_sub(16));
        put(buf, inner.x + 16, y, &fit(&shown, vw as usize), vw, vs);
        let hx = inner.x + 17 + vw;
        if hx < inner.x + inner.width {
            put(
                buf,
                hx,
                y,
                field_hint(col),
                inner.x + inner.width - hx,
                s.theme.dim(),
            );
        }
    }
    let ey = inner.y + inner.height - 2;
    if let Some((field, msg)) = &f.error {
        super::fmt::put_form_error(buf, inner, ey, &format!("✗ {field}: {msg}"), s.theme.warn());
    }
    let keys = format!(
        "{} check and keep · {} drop · {} next field · {} choices",
        keys_for(Scope::Form, Action::Accept),
        keys_for(Scope::Form, Action::Cancel),
        keys_for(Scope::Form, Action::NextField),
        keys_for(Scope::Form, Action::NextChoice)
            + "/"
            + &keys_for(Scope::Form, Action::PrevChoice),
    );
    put(buf, inner.x, ey + 1, &keys, inner.width, s.theme.dim());
}

/// The site picker.
pub fn sites(s: &State, sel: usize, area: Rect, buf: &mut Buffer) {
    let h = (s.sites.len() as u16 + 3).min(area.height);
    let r = centered(area, 70, h);
    let inner = frame("Site (Enter uses it, Esc keeps the current)", r, buf, s);
    let rows = inner.height.saturating_sub(1) as usize;
    let off = sel.saturating_sub(rows.saturating_sub(1));
    for (k, site) in s.sites.iter().enumerate().skip(off).take(rows) {
        let y = inner.y + (k - off) as u16;
        let cur = if site.name == s.site().name {
            "●"
        } else {
            " "
        };
        let text = format!(
            "{cur} {} {:>9.4}° {:>10.4}° {:>6.0} m  {}",
            fit(&site.name, 20),
            site.lat_deg,
            site.lon_deg,
            site.elev_m,
            site.timezone.name()
        );
        let st = if k == sel {
            s.theme.selected()
        } else {
            s.theme.text()
        };
        put(
            buf,
            inner.x,
            y,
            &fit(&text, inner.width as usize),
            inner.width,
            st,
        );
    }
    put(
        buf,
        inner.x,
        inner.y + inner.height - 1,
        "sites come from the built-in catalogue and your sites.toml",
        inner.width,
        s.theme.dim(),
    );
}

/// A yes/no question.
pub fn question(s: &State, q: &Question, area: Rect, buf: &mut Buffer) {
    if let Question::Notes { notes, scroll } = q {
        return notes_window(s, notes, *scroll, area, buf);
    }
    let (title, text) = match q {
        Question::Notes { .. } => ("Notes", String::new()),
        // Drawn by the Budget view's module (`budget::exported`).
        Question::Exported(files) => (
            "Exported",
            files
                .iter()
                .map(|f| f.display().to_string())
                .collect::<Vec<_>>()
                .join(" "),
        ),
        Question::Quit => (
            "Unsaved changes",
            format!(
                "The programme has unsaved changes ({}). Quit without saving?",
                s.programme.save_path.display()
            ),
        ),
        Question::Remove(n) => (
            "Remove target",
            format!("Remove {n} from the programme? (u undoes it)"),
        ),
        Question::Restore(r) => (
            "Unsaved edits found",
            format!(
                "An earlier session ended with unsaved edits, kept in {}{} ({} targets).{} \
                 Restore them? y restores them as unsaved edits; n sets them aside in {}.",
                r.path.display(),
                r.written
                    .as_ref()
                    .map(|w| format!(" at {w}"))
                    .unwrap_or_default(),
                r.targets.len(),
                r.note
                    .as_ref()
                    .map(|n| format!(" {n}."))
                    .unwrap_or_default(),
                crate::tui::state::declined_recovery_path(&r.path).display()
            ),
        ),
        Question::Overwrite(names) => (
            "Changed by another session",
            format!(
                "Another session saved {} since this one read it, and you both changed {}. \
                 Overwrite it with this session's programme? y overwrites (the file as the \
                 other session saved it is kept in {}); n leaves it and keeps your edits unsaved.",
                s.programme.save_path.display(),
                names.join(", "),
                s.programme.backup_path().display()
            ),
        ),
    };
    let w = area.width.min(64).saturating_sub(2).max(1) as usize;
    let keys = format!(
        "{} yes · {} no",
        keys_for(Scope::Question, Action::Yes),
        keys_for(Scope::Question, Action::No)
    );
    text_window(
        s,
        area,
        buf,
        title,
        64,
        &wrap(&text, w),
        s.theme.notice(),
        1,
        &|_| keys.clone(),
        s.theme.text(),
    );
}

/// The instrument picker.
pub fn instruments(s: &State, sel: usize, area: Rect, buf: &mut Buffer) {
    let h = (s.instruments.len() as u16 + 3).min(area.height);
    let r = centered(area, 60, h);
    let inner = frame(
        "Instrument (Enter uses it, Esc keeps the current)",
        r,
        buf,
        s,
    );
    let rows = inner.height.saturating_sub(1) as usize;
    let off = sel.saturating_sub(rows.saturating_sub(1));
    for (k, name) in s.instruments.iter().enumerate().skip(off).take(rows) {
        let y = inner.y + (k - off) as u16;
        let cur = if *name == s.settings.instrument().name {
            "●"
        } else {
            " "
        };
        let st = if k == sel {
            s.theme.selected()
        } else {
            s.theme.text()
        };
        put(
            buf,
            inner.x,
            y,
            &fit(&format!("{cur} {name}"), inner.width as usize),
            inner.width,
            st,
        );
    }
    put(
        buf,
        inner.x,
        inner.y + inner.height - 1,
        "used for exposures in the Phase and Chase views",
        inner.width,
        s.theme.dim(),
    );
}

/// Every caution and note of the Phase view's report, each wrapped whole,
/// a blank line between (any key closes the window).
fn notes_window(s: &State, notes: &[String], scroll: u16, area: Rect, buf: &mut Buffer) {
    let (lines, shown) = notes_layout(notes, area.width, area.height);
    let n = lines.len();
    let off = (scroll as usize).min(n.saturating_sub(shown));
    text_window(
        s,
        area,
        buf,
        &format!("Notes ({})", notes.len()),
        78,
        &lines[off..],
        s.theme.text(),
        1,
        &|_| {
            if n > shown {
                format!(
                    "lines {}–{} of {n} · ↑↓ PgUp PgDn scroll · any key closes",
                    off + 1,
                    (off + shown).min(n)
                )
            } else {
                "any key closes".to_string()
            }
        },
        s.theme.dim(),
    );
}

/// The notes window's lines in an area of `w` × `h` (each note wrapped
/// whole, a blank line between two) and how many of them it shows.
pub fn notes_layout(notes: &[String], w: u16, h: u16) -> (Vec<String>, usize) {
    let width = w.min(78).saturating_sub(4).max(1) as usize;
    let mut lines: Vec<String> = Vec::new();
    for (i, n) in notes.iter().enumerate() {
        if i > 0 {
            lines.push(String::new());
        }
        lines.extend(wrap(n, width));
    }
    // As text_window sizes it: the lines, the frame, the gap and the foot.
    let win_h = (lines.len() as u16 + 4).min(h);
    let shown = (win_h.saturating_sub(2 + 2) as usize).min(lines.len());
    (lines, shown)
}
