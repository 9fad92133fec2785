//! The views and the chrome around them. Every function here only reads the
//! state and writes cells: nothing is computed that the library did not cache.

pub mod budget;
pub mod chart;
pub mod chase;
pub mod chase_foot;
pub mod fmt;
pub mod ladder;
pub mod next;
pub mod overlays;
pub mod parallax;
pub mod phase;
pub mod roster;
pub mod season;
pub mod tonight;

use crate::tui::keymap::Action;
use crate::tui::keymap::{Scope, keys_for};
use crate::tui::state::{Level, Overlay, State, View};
use fmt::{hm, hm_utc, put};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;

/// The preamble a programme-wide view (Budget, Ladder) draws: "NAME:
/// window too small" under `min_h` rows or 40 columns; the title line
/// "NAME · from to to · site · instrument" (the programme's settings);
/// then, two lines down, `pending` (dim) while the result is computed, or
/// "ERR_PREFIX: why" wrapped (warn) when it failed. The result when there
/// is one to draw, else `None` (the view has drawn all it shows).
#[allow(clippy::too_many_arguments)]
pub fn programme_view<'a, T>(
    s: &State,
    area: Rect,
    buf: &mut Buffer,
    name: &str,
    min_h: u16,
    pending: &str,
    result: Option<&'a Result<T, String>>,
    err_prefix: &str,
) -> Option<&'a T> {
    let th = &s.theme;
    if area.height < min_h || area.width < 40 {
        put(
            buf,
            area.x,
            area.y,
            &format!("{name}: window too small"),
            area.width,
            th.dim(),
        );
        return None;
    }
    let st = &s.settings;
    let title = fmt::title_parts(
        &[
            name.to_string(),
            format!("{} to {}", st.from, st.to),
            st.site.name.clone(),
            st.instrument().name.clone(),
        ],
        area.width as usize,
    );
    put(buf, area.x, area.y, &title, area.width, th.title());
    match result {
        None => {
            put(buf, area.x, area.y + 2, pending, area.width, th.dim());
            None
        }
        Some(Err(e)) => {
            let lines = fmt::wrap(&format!("{err_prefix}: {e}"), area.width as usize);
            for (y, part) in (area.y + 2..area.y + area.height).zip(lines) {
                put(buf, area.x, y, &part, area.width, th.warn());
            }
            None
        }
        Some(Ok(r)) => Some(r),
    }
}

/// When a detail list (Phase windows, Chase nights) has more rows than it shows,
/// say which are shown and the keys that scroll it, right-aligned on row `y`.
pub fn scroll_mark(
    s: &State,
    area: Rect,
    y: u16,
    off: usize,
    rows: usize,
    len: usize,
    buf: &mut Buffer,
) {
    if len <= rows || rows == 0 {
        return;
    }
    let text = format!(
        "rows {}-{} of {len} · {}/{} scroll",
        off + 1,
        (off + rows).min(len),
        keys_for(Scope::Main, Action::DetailDown),
        keys_for(Scope::Main, Action::DetailUp)
    );
    let w = text.chars().count() as u16;
    if w < area.width {
        put(buf, area.x + area.width - w, y, &text, w, s.theme.header());
    }
}

/// The status line: site, UTC and local time, Sun altitude, Moon phase and rise/set.
pub fn status_text(s: &State, width: u16) -> String {
    let local = crate::output::clock_hm(s.now, &s.site().timezone);
    let sun = s
        .sky
        .as_ref()
        .map(|k| format!("Sun {:+.1}°", k.sun_alt_deg))
        .unwrap_or_else(|| "Sun —".into());
    let moon = s.sky.as_ref().map(|k| {
        (
            k.moon_illumination * 100.0,
            k.moon_waxing,
            k.moon_alt_deg > 0.0,
        )
    });
    let ev = s.night_now().map(|n| &n.events);
    let rise = ev.map(|e| hm(e.moonrise.t, s.site())).unwrap_or("…".into());
    let set = ev.map(|e| hm(e.moonset.t, s.site())).unwrap_or("…".into());
    let live = if s.live { "  LIVE" } else { "" };
    let long = match moon {
        Some((pct, wax, up)) => format!(
            "{}  UTC {}  local {}  {}  Moon {:.0}% {} ({}), rise {} set {}{}",
            s.site().name,
            hm_utc(s.now),
            local,
            sun,
            pct,
            if wax { "waxing" } else { "waning" },
            if up { "up" } else { "down" },
            rise,
            set,
            live
        ),
        None => format!(
            "{}  UTC {}  local {}  {}{}",
            s.site().name,
            hm_utc(s.now),
            local,
            sun,
            live
        ),
    };
    if long.chars().count() <= width as usize {
        return long;
    }
    match moon {
        Some((pct, wax, _)) => format!(
            "{}  UTC {}  local {}  {}  Moon {:.0}%{} r{} s{}{}",
            s.site().name,
            hm_utc(s.now),
            local,
            sun,
            pct,
            if wax { "+" } else { "-" },
            rise,
            set,
            live
        ),
        None => long,
    }
}

fn status(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    buf.set_style(area, th.selected());
    put(
        buf,
        area.x,
        area.y,
        &status_text(s, area.width),
        area.width,
        th.selected(),
    );
}

fn tabs(s: &State, area: Rect, buf: &mut Buffer) {
    let th = &s.theme;
    let mut x = area.x;
    let roomy = area.width >= 100;
    for (i, v) in View::ALL.iter().enumerate() {
        let label = if roomy {
            format!(" {} {} ", i + 1, v.title())
        } else if *v == s.view {
            format!("{} {}", i + 1, v.title())
        } else {
            // Narrow screens: the other views by number and their first three letters.
            format!("{} {}", i + 1, &v.title()[..3])
        };
        if i > 0 && !roomy {
            x = put(buf, x, area.y, " ", 1, th.dim());
        }
        let st = if *v == s.view {
            th.selected().patch(th.title())
        } else {
            th.dim()
        };
        x = put(
            buf,
            x,
            area.y,
            &label,
            area.width.saturating_sub(x - area.x),
            st,
        );
        if roomy {
            x = put(buf, x, area.y, "│", 1, th.dim());
        }
    }
    let file = if s.programme.is_demo {
        "demo".to_string()
    } else {
        s.programme
            .save_path
            .file_name()
            .map(|f| f.to_string_lossy().to_string())
            .unwrap_or_default()
    };
    let night = if roomy {
        format!(" night {} ", s.date.format("%a %Y-%m-%d"))
    } else {
        format!("  {} ", s.date.format("%Y-%m-%d"))
    };
    let rest = |x: u16| area.width.saturating_sub(x - area.x);
    x = put(buf, x, area.y, &night, rest(x), th.text());
    if s.dirty() {
        x = put(buf, x, area.y, "● unsaved ", rest(x), th.notice());
    }
    put(buf, x, area.y, &file, rest(x), th.dim());
}

/// The bottom line: the filter being typed, the last message, or the main keys.
pub fn bottom_text(s: &State) -> (String, Level) {
    if s.filtering {
        return (
            format!(
                "filter: {}▏  ({} keep · {} clear)",
                s.filter,
                keys_for(Scope::Filter, Action::Accept),
                keys_for(Scope::Filter, Action::Cancel)
            ),
            Level::Info,
        );
    }
    if let Some((m, l)) = &s.message {
        return (m.clone(), *l);
    }
    let k = |a| keys_for(Scope::Main, a);
    (
        format!(
            "{} keys · {} quit · ← → night · {} filter · {} add · {} edit · {} save · {} site",
            k(Action::Help),
            keys_for(Scope::Main, Action::Quit)
                .split(' ')
                .next()
                .unwrap_or("q"),
            k(Action::Filter),
            k(Action::Add),
            keys_for(Scope::Main, Action::Edit)
                .split(' ')
                .next()
                .unwrap_or("e"),
            k(Action::Save).split(' ').next().unwrap_or("w"),
            k(Action::Sites),
        ),
        Level::Info,
    )
}

/// Most lines the bottom text may take: a warning or a confirmation longer
/// than the screen is wide (one naming a file, or another session) wraps
/// upward over the view rather than being cut at the right edge. A hint
/// (the keys line, the demo's note on where saves go) keeps its one line.
const BOTTOM_LINES_MAX: u16 = 3;

/// The bottom text wrapped at `width` columns, at most [`BOTTOM_LINES_MAX`]
/// lines and `room` lines (the last one cut when it still does not fit).
fn bottom_lines(s: &State, width: u16, room: u16) -> (Vec<String>, Level) {
    let (text, level) = bottom_text(s);
    let keep = usize::from(BOTTOM_LINES_MAX.min(room).max(1));
    if level == Level::Info || text.chars().count() <= usize::from(width) || width < 8 {
        return (vec![text], level);
    }
    let mut lines = fmt::wrap(&text, usize::from(width));
    if lines.len() > keep {
        let rest = lines.split_off(keep - 1).join(" ");
        lines.push(rest);
    }
    (lines, level)
}

fn bottom(s: &State, lines: &[String], level: Level, area: Rect, buf: &mut Buffer) {
    let st = match level {
        Level::Info => s.theme.dim(),
        Level::Good => s.theme.good(),
        Level::Warn => s.theme.warn(),
    };
    for (i, line) in lines.iter().enumerate() {
        put(buf, area.x, area.y + i as u16, line, area.width, st);
    }
}

/// The bottom lines on a screen of `w` × `h` and the rows the view (and
/// an overlay over it) keeps: all but the status line, the tabs and the
/// bottom lines, the view keeping at least half the rows below the tabs.
fn bottom_and_body(s: &State, w: u16, h: u16) -> (Vec<String>, Level, u16) {
    let (low, level) = bottom_lines(s, w, h.saturating_sub(2) / 2);
    let body_h = h.saturating_sub(2 + low.len() as u16);
    (low, level, body_h)
}

/// The rows the view (and an overlay over it) has on a screen of `w` × `h`
/// ([`bottom_and_body`]).
pub fn body_height(s: &State, w: u16, h: u16) -> u16 {
    bottom_and_body(s, w, h).2
}

/// Draw the whole screen into `buf`.
pub fn render_all(s: &State, area: Rect, buf: &mut Buffer) {
    if area.height < 4 || area.width < 20 {
        put(
            buf,
            area.x,
            area.y,
            "rung: terminal too small",
            area.width,
            s.theme.warn(),
        );
        return;
    }
    status(s, Rect::new(area.x, area.y, area.width, 1), buf);
    tabs(s, Rect::new(area.x, area.y + 1, area.width, 1), buf);
    let (low, level, body_h) = bottom_and_body(s, area.width, area.height);
    let n = low.len() as u16;
    let body = Rect::new(area.x, area.y + 2, area.width, body_h);
    match s.view {
        View::Roster => roster::render(s, body, buf),
        View::Tonight => tonight::render(s, body, buf),
        View::Season => season::render(s, body, buf),
        View::Parallax => parallax::render(s, body, buf),
        View::Phase => phase::render(s, body, buf),
        View::Chase => chase::render(s, body, buf),
        View::Budget => budget::render(s, body, buf),
        View::Next => next::render(s, body, buf),
        View::Ladder => ladder::render(s, body, buf),
    }
    bottom(
        s,
        &low,
        level,
        Rect::new(area.x, area.y + area.height - n, area.width, n),
        buf,
    );
    match &s.overlay {
        None => {}
        Some(Overlay::Help { scroll }) => overlays::help(s, *scroll, body, buf),
        Some(Overlay::Form(f)) => overlays::form(s, f, body, buf),
        Some(Overlay::Sites { sel }) => overlays::sites(s, *sel, body, buf),
        Some(Overlay::Instruments { sel }) => overlays::instruments(s, *sel, body, buf),
        Some(Overlay::Question(crate::tui::state::Question::Exported(files))) => {
            budget::exported(s, files, body, buf)
        }
        Some(Overlay::Question(q)) => overlays::question(s, q, body, buf),
        Some(Overlay::BudgetAsk(f)) => budget::ask_form(s, f, body, buf),
    }
}

/// The method report the current view should draw, or `None` after drawing
/// the view's title and why there is nothing yet: still computing (`waiting`),
/// not applicable to the selected target, or failed.
pub fn method_report<'a>(
    s: &'a State,
    area: Rect,
    buf: &mut Buffer,
    view: &str,
    waiting: &str,
) -> Option<&'a crate::tui::state::MethodBody> {
    use crate::tui::state::MethodBody;
    let th = &s.theme;
    let name = s.selected().map(|t| t.name.clone()).unwrap_or_default();
    let title = |buf: &mut Buffer| {
        fmt::put(
            buf,
            area.x,
            area.y,
            &format!("{view} · {name}"),
            area.width,
            th.title(),
        );
    };
    match s.method_now() {
        None => {
            title(buf);
            fmt::put(buf, area.x, area.y + 2, waiting, area.width, th.dim());
            None
        }
        Some(MethodBody::NotApplicable(m)) | Some(MethodBody::Failed(m)) => {
            title(buf);
            // Whole, wrapped onto the lines below the title (a method's
            // refusal can be long).
            let lines = fmt::wrap(m, area.width as usize);
            for (i, l) in lines
                .iter()
                .take(area.height.saturating_sub(2) as usize)
                .enumerate()
            {
                fmt::put(
                    buf,
                    area.x,
                    area.y + 2 + i as u16,
                    l,
                    area.width,
                    th.notice(),
                );
            }
            None
        }
        Some(b) => Some(b),
    }
}
