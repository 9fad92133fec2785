//! `update`: the only place the state changes.

use crate::astro::frames::Context;
use crate::astro::night::Limits;
use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::astro::{pointing, sun_caution};
use crate::io::targets::Target;
use crate::programme::Settings;
use crate::tui::form::Form;
use crate::tui::keymap::Action;
use crate::tui::keymap::{self, Scope};
use crate::tui::msg::DoneTyped;
use crate::tui::msg::{Effect, Msg, NextJob, NextOp, NightJob, PlanJob, RecoveryOp, SeasonJob};
use crate::tui::state::{
    Level, Overlay, PLAN_HOURS_PER_NIGHT, PLAN_HOURS_RANGE, Programme, Question, Recovered,
    SeasonData, SkyNow, SortKey, State, UNDO_DEPTH, View, scroll_offset,
};
use crate::tui::theme::Theme;
use chrono::{Months, NaiveDate};
use crossterm::event::{KeyCode, KeyEventKind, KeyModifiers};
use std::sync::Arc;

/// Everything needed to open the UI.
#[derive(Debug, Clone)]
pub struct Setup {
    /// The programme's settings, resolved once (`crate::programme::Settings::resolve`).
    pub settings: Settings,
    /// Sites the picker offers.
    pub sites: Vec<Site>,
    /// The night shown first, or `None` for the current night (live).
    pub date: Option<NaiveDate>,
    /// The clock at start.
    pub now: Instant,
    /// The programme.
    pub targets: Vec<Target>,
    /// Its files.
    pub programme: Programme,
    /// Terminal size.
    pub size: (u16, u16),
    /// Styles.
    pub theme: Theme,
    /// A first message (e.g. rows refused when loading).
    pub message: Option<String>,
    /// Instruments the picker offers.
    pub instruments: Vec<String>,
    /// Unsaved edits an earlier session left beside the programme file, offered back at once.
    pub recovered: Option<Recovered>,
}

/// The night an observer means at `site` when the clock says `now`
/// ([`crate::programme::tonight`]: after local noon the coming night, in the
/// dark after midnight the night in progress, after sunrise the coming night).
pub fn night_date(site: &Site, now: Instant) -> NaiveDate {
    crate::programme::tonight(site, now)
        .unwrap_or_else(|_| (now.local(&site.timezone) - chrono::Duration::hours(12)).date_naive())
}

/// The first state and the effects it needs (the night table).
pub fn init(setup: Setup) -> (State, Option<Effect>) {
    let live = setup.date.is_none();
    let date = setup
        .date
        .unwrap_or_else(|| night_date(&setup.settings.site, setup.now));
    let targets = Arc::new(setup.targets);
    let mut s = State {
        settings: Arc::new(setup.settings),
        sites: setup.sites,
        date,
        live,
        now: setup.now,
        sky: None,
        saved: targets.clone(),
        targets,
        undo: Vec::new(),
        redo: Vec::new(),
        programme: setup.programme,
        view: View::Roster,
        sel: 0,
        order: Vec::new(),
        sort: SortKey::File,
        sort_rev: false,
        filter: String::new(),
        filtering: false,
        overlay: None,
        night: None,
        night_gen: 0,
        night_error: None,
        season: SeasonData::default(),
        season_step_days: 7,
        instruments: setup.instruments,
        plan_hours_per_night: PLAN_HOURS_PER_NIGHT,
        detail_scroll: 0,
        method: None,
        method_pending: None,
        budget: None,
        budget_pending: None,
        nights_asked: None,
        budget_partial: None,
        ladder: None,
        ladder_pending: None,
        budget_ask: crate::tui::ask::BudgetAsk {
            asked: None,
            export_dir: std::env::current_dir().unwrap_or_default(),
        },
        message: setup.message.map(|m| (m, Level::Warn)),
        size: setup.size,
        theme: setup.theme,
        quit: false,
        plan_file: None,
        next: None,
        next_sel: 0,
        next_prompt: None,
        next_typed: None,
    };
    if s.message.is_none() && s.programme.is_demo {
        s.message = Some((
            format!(
                "demo programme: saving writes your own {}",
                s.programme.save_path.display()
            ),
            Level::Info,
        ));
    }
    if let Some(r) = setup.recovered {
        s.overlay = Some(Overlay::Question(Question::Restore(Box::new(r))));
    }
    s.reorder();
    follow_clock(&mut s);
    refresh_sky(&mut s);
    let e = recompute(&mut s);
    (s, e)
}

/// When the clock has moved on to a later night, the programme's range starts
/// there (method views and exports never plan on a night that is over).
/// Whether the settings changed.
fn follow_clock(s: &mut State) -> bool {
    let tonight = night_date(s.site(), s.now);
    match s.settings.on_night(tonight) {
        Some(new) => {
            s.settings = Arc::new(new);
            true
        }
        None => false,
    }
}

/// Keep the unsaved edits in the recovery file, or remove it once nothing is unsaved.
/// The recovery file records the base the edits were made on, so that edits
/// restored after a crash merge with what was saved since ([`crate::io::merge`]).
fn keep_edits(s: &State) -> Effect {
    Effect::Recovery {
        path: s.programme.recovery_path(),
        op: if s.dirty() {
            RecoveryOp::Keep(crate::io::merge::recovery_text(
                &s.programme.save_path.display().to_string(),
                s.programme.disk,
                &s.saved,
                &s.targets,
                &s.programme.text_of(&s.targets),
            ))
        } else {
            RecoveryOp::Remove
        },
    }
}

fn refresh_sky(s: &mut State) {
    let Ok(ctx) = Context::exact(s.site(), s.now) else {
        s.sky = None;
        return;
    };
    let caution = s
        .selected()
        .and_then(|t| sun_caution(s.site(), &pointing(s.site(), &ctx, &t.place())));
    s.sky = Some(SkyNow {
        sun_alt_deg: ctx.sun().alt_geom_rad.to_degrees(),
        moon_alt_deg: ctx.moon().alt_geom_rad.to_degrees(),
        moon_illumination: ctx.moon_illumination(),
        moon_waxing: ctx.moon_waxing(),
        caution,
        ctx,
    });
}

fn refresh_caution(s: &mut State) {
    let caution = match (&s.sky, s.selected()) {
        (Some(sky), Some(t)) => sun_caution(s.site(), &pointing(s.site(), &sky.ctx, &t.place())),
        _ => None,
    };
    if let Some(sky) = s.sky.as_mut() {
        sky.caution = caution;
    }
}

/// Ask for the night table again (date, site, limits or targets changed).
fn recompute(s: &mut State) -> Option<Effect> {
    s.night_gen += 1;
    let night = Effect::Night(Box::new(NightJob {
        site: s.site().clone(),
        date: s.date,
        limits: s.settings.limits,
        targets: s.targets.clone(),
        generation: s.night_gen,
    }));
    Effect::join(Some(night), season_effect(s))
}

/// The Next view's job: `op` on the plan, then the queue at the clock.
fn next_effect(s: &State, op: NextOp) -> Effect {
    Effect::Next(Box::new(NextJob {
        settings: s.settings.clone(),
        targets: s.targets.to_vec(),
        plan_file: s.plan_file.clone(),
        now: s.now,
        op,
    }))
}

/// The planned visit of the Next view's selected row.
fn selected_visit(s: &State) -> Option<String> {
    s.next
        .as_ref()?
        .queue
        .as_ref()
        .ok()?
        .rows
        .get(s.next_sel)?
        .visit_id
        .clone()
}

/// Seeing, measured signal-to-noise and comment typed as one line: a first
/// word that is a number is the seeing in arcseconds, a word `snr=…` the
/// signal-to-noise measured (what `rung plan --snr` takes: `snr=62`,
/// `snr=B=55,V=70`), the rest the comment ("1.2 snr=62 thin cirrus").
/// Errors: an `snr=` word that is not a signal-to-noise.
pub fn done_typed(text: &str) -> crate::error::Result<DoneTyped> {
    let t = text.trim();
    let (first, rest) = t.split_once(' ').unwrap_or((t, ""));
    let (seeing_arcsec, rest) = match first.trim_end_matches('"').parse::<f64>() {
        Ok(x) if x.is_finite() => (Some(x), rest),
        _ => (None, t),
    };
    let mut snr_measured = Vec::new();
    let mut words = Vec::new();
    for w in rest.split_whitespace() {
        match w.get(..4) {
            Some(p) if p.eq_ignore_ascii_case("snr=") => {
                snr_measured.extend(crate::plan::schedule::parse_snr_measured(&w[4..])?);
            }
            _ => words.push(w),
        }
    }
    let comment = Some(words.join(" ")).filter(|c| !c.is_empty());
    Ok(DoneTyped {
        seeing_arcsec,
        comment,
        snr_measured,
    })
}

/// [`crate::plan::schedule::Visit::check_mark`] of what was typed for visit
/// `id`, when the Next view holds its plan (else the mark's own refusal
/// tells).
fn check_typed(s: &State, id: &str, t: &DoneTyped) -> crate::error::Result<()> {
    let visit = s
        .next
        .as_ref()
        .and_then(|d| d.plan.as_ref())
        .and_then(|p| p.visits.iter().find(|v| v.id == id));
    let Some(v) = visit else {
        return Ok(());
    };
    v.check_mark(&t.mark(s.now), &s.targets).map(|_| ())
}

/// Ask for what the current view is missing: season rows, or the method report.
fn season_effect(s: &mut State) -> Option<Effect> {
    let a = season_rows_effect(s);
    let b = Effect::join(a, method_effect(s));
    let c = Effect::join(b, budget_effect(s));
    Effect::join(c, ladder_effect(s))
}

/// Ask for the distance ladder when the Ladder view shows and it is not
/// cached for the programme and settings.
fn ladder_effect(s: &mut State) -> Option<Effect> {
    if s.view != View::Ladder {
        return None;
    }
    let k = s.budget_key();
    if s.ladder.as_ref().is_some_and(|l| l.0 == k) || s.ladder_pending.as_ref() == Some(&k) {
        return None;
    }
    s.ladder_pending = Some(k.clone());
    Some(Effect::Ladder(Box::new(k)))
}

/// Ask for the budget when the Budget view or the Roster (its goal-progress
/// column) shows and it is not cached.
fn budget_effect(s: &mut State) -> Option<Effect> {
    if !matches!(s.view, View::Budget | View::Roster) {
        return None;
    }
    let k = s.budget_key();
    if s.budget.as_ref().is_some_and(|b| s.budget_satisfies(&b.0)) {
        return None;
    }
    if let Some(p) = s.budget_pending.as_ref()
        && *p == k
        && !(s.view == View::Roster && s.rows_in_sight_wait(&p.first))
    {
        return None;
    }
    // Asked anew (a newer key, or the same with other rows on screen that
    // the running job would come to late): the runner stops the running job,
    // whose targets done so far are kept for this one.
    s.budget_pending = Some(k.clone());
    let budget = Some(Effect::Budget(Box::new(k)));
    // Its nights are built meanwhile (the budget waits for the night table).
    let nights = crate::tui::state::NightsJob {
        site: s.settings.site.clone(),
        from: s.settings.from,
        to: s.settings.to,
    };
    if s.nights_asked.as_ref() == Some(&nights) {
        return budget;
    }
    s.nights_asked = Some(nights.clone());
    Effect::join(Some(Effect::Nights(Box::new(nights))), budget)
}

fn export(s: &mut State) -> Option<Effect> {
    if s.targets.is_empty() {
        say(s, "nothing to export: the programme is empty", Level::Warn);
        return None;
    }
    let stem = format!(
        "budget-{}-{}-to-{}",
        s.site().name,
        s.settings.from,
        s.settings.to
    );
    say(
        s,
        "exporting the budget (each target's hours curve first) …",
        Level::Info,
    );
    Some(Effect::BudgetExport(Box::new((
        s.budget_key(),
        s.budget_ask.export_dir.clone(),
        stem,
    ))))
}

fn export_dir(s: &State) -> std::path::PathBuf {
    s.programme
        .save_path
        .parent()
        .map(|p| p.to_path_buf())
        .unwrap_or_default()
}

/// Schedule the programme's range (from the coming night on) and export the
/// plan and the shown night's sheet (in the background).
fn export_plan(s: &mut State) -> Option<Effect> {
    if s.targets.is_empty() {
        say(s, "nothing to plan: the programme is empty", Level::Warn);
        return None;
    }
    let (from, to) = (s.settings.from, s.settings.to);
    let targets_file = s
        .programme
        .source
        .as_ref()
        .unwrap_or(&s.programme.save_path)
        .display()
        .to_string();
    let job = PlanJob {
        settings: s.settings.clone(),
        targets: s.targets.to_vec(),
        targets_file,
        hours_per_night: s.plan_hours_per_night,
        sheet_night: s.date.max(from),
        stamp: s.now,
        dir: export_dir(s),
    };
    say(
        s,
        format!(
            "planning {from} to {to} ({:.0} h a night) and exporting …",
            s.plan_hours_per_night
        ),
        Level::Info,
    );
    Some(Effect::ExportPlan(Box::new(job)))
}

/// Ask for the Phase or Chase report of the selected target when it is not cached.
fn method_effect(s: &mut State) -> Option<Effect> {
    let k = s.method_key()?;
    if s.method.as_ref().is_some_and(|m| m.key == k) || s.method_pending.as_ref() == Some(&k) {
        return None;
    }
    s.method_pending = Some(k.clone());
    Some(Effect::Method(Box::new(k)))
}

/// Ask for the season rows the Season view is missing.
fn season_rows_effect(s: &mut State) -> Option<Effect> {
    let key = s.season_key();
    if s.season.key.as_ref() != Some(&key) {
        s.season = SeasonData {
            key: Some(key.clone()),
            ..SeasonData::default()
        };
    }
    if s.view != View::Season {
        return None;
    }
    if s.season.nights.is_none() && !s.season.pending.is_empty() {
        return None; // the first job computes the nights; wait for it
    }
    let h = s.list_rows();
    let off = scroll_offset(s.sel, h);
    let want: Vec<Target> = s
        .order
        .iter()
        .skip(off)
        .take(h.max(1))
        .map(|i| &s.targets[*i])
        .filter(|t| !s.season.hours.contains_key(&t.name) && !s.season.pending.contains(&t.name))
        .cloned()
        .collect();
    if want.is_empty() {
        return None;
    }
    for t in &want {
        s.season.pending.insert(t.name.clone());
    }
    Some(Effect::Season(Box::new(SeasonJob {
        key,
        site: s.site().clone(),
        nights: s.season.nights.clone(),
        targets: want,
    })))
}

fn say(s: &mut State, text: impl Into<String>, level: Level) {
    s.message = Some((text.into(), level));
}

/// Replace the programme, keeping the old one for undo.
fn change(s: &mut State, new: Vec<Target>, what: String) -> Option<Effect> {
    let keep = s.selected().map(|t| t.name.clone());
    let old = std::mem::replace(&mut s.targets, Arc::new(new));
    // The targets the change made or altered lose their season hours (looked
    // up by name: a linear search each would be 10^8 comparisons at 10,000).
    let mut was: std::collections::HashMap<&str, Vec<&Target>> = Default::default();
    for t in old.iter() {
        was.entry(t.name.as_str()).or_default().push(t);
    }
    for t in s.targets.iter() {
        if !was.get(t.name.as_str()).is_some_and(|v| v.contains(&t)) {
            s.season.hours.remove(&t.name);
        }
    }
    s.undo.push(old);
    if s.undo.len() > UNDO_DEPTH {
        s.undo.remove(0);
    }
    s.redo.clear();
    after_change(s, what, keep)
}

fn after_change(s: &mut State, what: String, keep: Option<String>) -> Option<Effect> {
    s.reorder_keeping(keep);
    refresh_caution(s);
    let note = if s.dirty() { " (unsaved)" } else { "" };
    say(s, format!("{what}{note}"), Level::Info);
    Effect::join(Some(keep_edits(s)), recompute(s))
}

fn select_name(s: &mut State, name: &str) {
    if let Some(p) = s.order.iter().position(|i| s.targets[*i].name == name) {
        s.sel = p;
    }
}

fn set_date(s: &mut State, d: Option<NaiveDate>) -> Option<Effect> {
    let Some(d) = d else {
        say(s, "that date is outside rung's span", Level::Warn);
        return None;
    };
    if crate::astro::time::parse_date(&d.to_string()).is_err() {
        say(
            s,
            format!("{d} is outside rung's valid span (1960-2100)"),
            Level::Warn,
        );
        return None;
    }
    s.date = d;
    recompute(s)
}

fn step_days(s: &mut State, days: i64) -> Option<Effect> {
    s.live = false;
    let d = if days >= 0 {
        s.date.checked_add_days(chrono::Days::new(days as u64))
    } else {
        s.date.checked_sub_days(chrono::Days::new((-days) as u64))
    };
    set_date(s, d)
}

fn step_months(s: &mut State, m: i32) -> Option<Effect> {
    s.live = false;
    let d = if m >= 0 {
        s.date.checked_add_months(Months::new(m as u32))
    } else {
        s.date.checked_sub_months(Months::new((-m) as u32))
    };
    set_date(s, d)
}

fn move_sel(s: &mut State, to: i64) -> Option<Effect> {
    let n = s.order.len() as i64;
    s.sel = to.clamp(0, (n - 1).max(0)) as usize;
    s.detail_scroll = 0;
    refresh_caution(s);
    season_effect(s)
}

/// Save; `force` writes over another session's changes (the user said so).
fn save(s: &mut State, force: bool) -> Option<Effect> {
    let p = &s.programme;
    let backup = match (&p.original, &p.source) {
        (Some(bytes), Some(src)) if !p.is_demo && *src == p.save_path => {
            Some((p.backup_path(), bytes.clone()))
        }
        _ => None,
    };
    let path = p.save_path.clone();
    let settings = p
        .source
        .as_ref()
        .map(|src| {
            (
                crate::programme::settings_path(src),
                crate::programme::settings_path(&path),
            )
        })
        .filter(|(a, b)| a != b);
    say(s, format!("saving {} …", path.display()), Level::Info);
    Some(Effect::Save(Box::new(crate::tui::msg::SaveJob {
        path,
        text: s.programme.text_of(&s.targets),
        backup,
        expect: s.programme.disk,
        force,
        base: s.saved.to_vec(),
        mine: s.targets.to_vec(),
        settings,
    })))
}

fn act(s: &mut State, a: Action) -> Option<Effect> {
    match s.scope() {
        Scope::Main => act_main(s, a),
        Scope::Form => act_form(s, a),
        Scope::Filter => {
            match a {
                Action::Accept => s.filtering = false,
                Action::Cancel => {
                    s.filtering = false;
                    s.filter.clear();
                    s.reorder();
                }
                _ => {}
            }
            season_effect(s)
        }
        Scope::Picker if matches!(s.overlay, Some(Overlay::Instruments { .. })) => {
            let Some(Overlay::Instruments { sel }) = s.overlay.as_mut() else {
                return None;
            };
            let n = s.instruments.len();
            match a {
                Action::Up => *sel = sel.saturating_sub(1),
                Action::Down => *sel = (*sel + 1).min(n.saturating_sub(1)),
                Action::Accept => {
                    let i = *sel;
                    s.overlay = None;
                    if let Some(name) = s.instruments.get(i).cloned() {
                        match s.settings.with_instrument(&name) {
                            Ok(new) => {
                                say(s, format!("instrument: {name}"), Level::Info);
                                s.settings = Arc::new(new);
                                return season_effect(s);
                            }
                            Err(e) => say(s, format!("instrument not changed: {e}"), Level::Warn),
                        }
                    }
                }
                Action::Cancel => s.overlay = None,
                _ => {}
            }
            None
        }
        Scope::Picker => {
            let Some(Overlay::Sites { sel }) = s.overlay.as_mut() else {
                return None;
            };
            let n = s.sites.len();
            match a {
                Action::Up => *sel = sel.saturating_sub(1),
                Action::Down => *sel = (*sel + 1).min(n.saturating_sub(1)),
                Action::Accept => {
                    let i = *sel;
                    s.overlay = None;
                    if let Some(site) = s.sites.get(i).cloned() {
                        say(s, format!("site: {}", site.name), Level::Info);
                        s.settings = Arc::new(s.settings.with_site(site));
                        if s.live {
                            s.date = night_date(s.site(), s.now);
                        }
                        follow_clock(s);
                        refresh_sky(s);
                        return recompute(s);
                    }
                }
                Action::Cancel => s.overlay = None,
                _ => {}
            }
            None
        }
        Scope::Question => {
            let Some(Overlay::Question(q)) = s.overlay.clone() else {
                return None;
            };
            s.overlay = None;
            match (q, a) {
                // Ctrl-C at a question: leave at once; unsaved edits stay in
                // the recovery file for the next start.
                (_, Action::QuitDiscard) => {
                    s.quit = true;
                    None
                }
                // The user chose to drop the edits: the recovery file goes too.
                (Question::Quit, Action::Yes) => {
                    s.quit = true;
                    Some(Effect::Recovery {
                        path: s.programme.recovery_path(),
                        op: RecoveryOp::Remove,
                    })
                }
                (Question::Restore(r), Action::Yes) => {
                    let n = r.targets.len();
                    let what = format!(
                        "restored the unsaved edits from {} ({n} targets){}",
                        r.path.display(),
                        r.note
                            .as_ref()
                            .map(|x| format!("; {x}"))
                            .unwrap_or_default()
                    );
                    let e = change(s, r.targets, what);
                    // Edits of another (ended) session now live in this
                    // session's file: the other file goes, or it would be
                    // offered again.
                    if r.path != s.programme.recovery_path() {
                        Effect::join(
                            e,
                            Some(Effect::Recovery {
                                path: r.path,
                                op: RecoveryOp::Remove,
                            }),
                        )
                    } else {
                        e
                    }
                }
                (Question::Overwrite(_), Action::Yes) => save(s, true),
                (Question::Overwrite(names), _) => {
                    say(
                        s,
                        format!(
                            "not saved: {} stays as the other session saved it; your edits ({}) stay unsaved, kept in {}",
                            s.programme.save_path.display(),
                            names.join(", "),
                            s.programme.recovery_path().display()
                        ),
                        Level::Warn,
                    );
                    None
                }
                (Question::Restore(r), _) => {
                    let old = crate::tui::state::declined_recovery_path(&r.path);
                    say(
                        s,
                        format!("unsaved edits not restored; set aside in {}", old.display()),
                        Level::Info,
                    );
                    Some(Effect::Recovery {
                        path: r.path.clone(),
                        op: RecoveryOp::SetAside,
                    })
                }
                (Question::Remove(name), Action::Yes) => {
                    let new: Vec<Target> = s
                        .targets
                        .iter()
                        .filter(|t| t.name != name)
                        .cloned()
                        .collect();
                    change(s, new, format!("removed {name}"))
                }
                _ => None,
            }
        }
        Scope::Help => {
            if let Some(Overlay::Help { scroll }) = s.overlay.as_mut() {
                match a {
                    Action::Down => *scroll = scroll.saturating_add(1),
                    Action::Up => *scroll = scroll.saturating_sub(1),
                    _ => s.overlay = None,
                }
            }
            None
        }
    }
}

fn act_form(s: &mut State, a: Action) -> Option<Effect> {
    if matches!(s.overlay, Some(Overlay::BudgetAsk(_))) {
        return act_ask(s, a);
    }
    let Some(Overlay::Form(f)) = s.overlay.as_mut() else {
        return None;
    };
    match a {
        Action::NextField => f.move_focus(1),
        Action::PrevField => f.move_focus(-1),
        Action::NextChoice => f.cycle(1),
        Action::PrevChoice => f.cycle(-1),
        Action::Cancel => {
            s.overlay = None;
            say(s, "form closed, nothing changed", Level::Info);
        }
        Action::Accept => match f.check(&s.targets) {
            Err((field, msg)) => {
                f.focus_on(&field);
                f.error = Some((field, msg));
            }
            Ok(t) => {
                let editing = f.editing.clone();
                s.overlay = None;
                let mut new = s.targets.to_vec();
                let name = t.name.clone();
                let what = match &editing {
                    Some(old) => {
                        match new.iter_mut().find(|x| &x.name == old) {
                            Some(slot) => *slot = t,
                            None => new.push(t),
                        }
                        format!("edited {name}")
                    }
                    None => {
                        new.push(t);
                        format!("added {name}")
                    }
                };
                if new == *s.targets {
                    say(s, format!("{name}: nothing changed"), Level::Info);
                    return None;
                }
                let e = change(s, new, what);
                select_name(s, &name);
                refresh_caution(s);
                return e;
            }
        },
        _ => {}
    }
    None
}

/// The Budget view's request form: fields, and on accept the new hours
/// asked, range and export folder (the range through `Settings::with_range`).
fn act_ask(s: &mut State, a: Action) -> Option<Effect> {
    let Some(Overlay::BudgetAsk(f)) = s.overlay.as_mut() else {
        return None;
    };
    match a {
        Action::NextField => f.move_focus(1),
        Action::PrevField => f.move_focus(-1),
        Action::Cancel => {
            s.overlay = None;
            say(s, "budget request unchanged", Level::Info);
        }
        Action::Accept => match f.check(&s.settings) {
            Err(e) => {
                f.focus = e.0;
                f.error = Some(e);
            }
            Ok((asked, st, dir)) => {
                s.overlay = None;
                let words = match &asked {
                    Some(a) => format!("{} asked", crate::tui::ask::asked_words(a)),
                    None => "no hours asked".to_string(),
                };
                say(
                    s,
                    format!(
                        "budget: {words}, {} to {}; exports to {}",
                        st.from,
                        st.to,
                        dir.display()
                    ),
                    Level::Info,
                );
                s.budget_ask = crate::tui::ask::BudgetAsk {
                    asked,
                    export_dir: dir,
                };
                let st = Arc::new(st);
                if !crate::tui::state::same_settings(&s.settings, &st) {
                    s.settings = st;
                    return recompute(s);
                }
                return season_effect(s);
            }
        },
        _ => {}
    }
    None
}

fn act_main(s: &mut State, a: Action) -> Option<Effect> {
    let before = s.view;
    let e = act_main_inner(s, a);
    if s.view != before {
        s.detail_scroll = 0;
    }
    e
}

fn act_main_inner(s: &mut State, a: Action) -> Option<Effect> {
    let page = s.list_rows().max(1) as i64;
    let sel = s.sel as i64;
    match a {
        Action::Quit => {
            if s.dirty() {
                s.overlay = Some(Overlay::Question(Question::Quit));
            } else {
                s.quit = true;
            }
            None
        }
        Action::QuitDiscard => {
            s.quit = true;
            None
        }
        Action::Help => {
            s.overlay = Some(Overlay::Help { scroll: 0 });
            None
        }
        Action::NextView => {
            s.view = s.view.step(1);
            season_effect(s)
        }
        Action::PrevView => {
            s.view = s.view.step(-1);
            season_effect(s)
        }
        Action::ShowRoster => {
            s.view = View::Roster;
            season_effect(s)
        }
        Action::ShowTonight => {
            s.view = View::Tonight;
            None
        }
        Action::ShowSeason => {
            s.view = View::Season;
            season_effect(s)
        }
        Action::ShowBudget => {
            s.view = View::Budget;
            season_effect(s)
        }
        Action::ShowNext => {
            s.view = View::Next;
            Some(next_effect(s, NextOp::Refresh))
        }
        Action::MarkDone | Action::MarkLost | Action::LoseNight | Action::Replan
            if s.view != View::Next =>
        {
            say(
                s,
                "marks and re-plans are made in the Next view (8)",
                Level::Info,
            );
            None
        }
        Action::MarkDone | Action::MarkLost if s.plan_file.is_none() => {
            say(
                s,
                "no plan to mark: start with rung tui --plan FILE (rung plan --save FILE makes one)",
                Level::Warn,
            );
            None
        }
        Action::MarkDone | Action::MarkLost => {
            let id = selected_visit(s);
            match id {
                None => {
                    say(
                        s,
                        "the selected row has no planned visit tonight",
                        Level::Info,
                    );
                    None
                }
                Some(id) if a == Action::MarkDone => {
                    s.next_prompt = Some((id, String::new()));
                    None
                }
                Some(id) => Some(next_effect(s, NextOp::Lost(id))),
            }
        }
        Action::LoseNight | Action::Replan if s.plan_file.is_none() => {
            say(s, "no plan: start with rung tui --plan FILE", Level::Warn);
            None
        }
        Action::LoseNight => Some(next_effect(s, NextOp::LoseNight)),
        Action::Replan => Some(next_effect(s, NextOp::Replan)),
        Action::ShowLadder => {
            s.view = View::Ladder;
            season_effect(s)
        }
        Action::BudgetAsk => {
            s.overlay = Some(Overlay::BudgetAsk(Box::new(crate::tui::ask::AskForm::new(
                &s.budget_ask,
                &s.settings,
            ))));
            None
        }
        Action::Export => export(s),
        Action::ExportPlan => export_plan(s),
        Action::ShowParallax => {
            s.view = View::Parallax;
            season_effect(s)
        }
        Action::ShowPhase => {
            s.view = View::Phase;
            season_effect(s)
        }
        Action::ShowChase => {
            s.view = View::Chase;
            season_effect(s)
        }
        Action::Instruments => {
            let sel = s
                .instruments
                .iter()
                .position(|x| *x == s.settings.instrument().name)
                .unwrap_or(0);
            s.overlay = Some(Overlay::Instruments { sel });
            None
        }
        Action::Up if s.view == View::Next => {
            s.next_sel = s.next_sel.saturating_sub(1);
            None
        }
        Action::Down if s.view == View::Next => {
            let n = s
                .next
                .as_ref()
                .and_then(|d| d.queue.as_ref().ok())
                .map_or(0, |q| q.rows.len());
            s.next_sel = (s.next_sel + 1).min(n.saturating_sub(1));
            None
        }
        Action::Up => move_sel(s, sel - 1),
        Action::Down => move_sel(s, sel + 1),
        Action::PageUp => move_sel(s, sel - page),
        Action::PageDown => move_sel(s, sel + page),
        Action::Top => move_sel(s, 0),
        Action::Bottom => move_sel(s, i64::MAX / 2),
        Action::NightBack => step_days(s, -1),
        Action::NightFwd => step_days(s, 1),
        Action::WeekBack => step_days(s, -7),
        Action::WeekFwd => step_days(s, 7),
        Action::MonthBack => step_months(s, -1),
        Action::MonthFwd => step_months(s, 1),
        Action::Today => {
            let d = night_date(s.site(), s.now);
            set_date(s, Some(d))
        }
        Action::Notes => {
            use crate::tui::state::MethodBody;
            // The notes of the view's report; Err: why there are none to show.
            let none_yet = "no notes here: the view shows no report for the selected target yet";
            let all: Result<Vec<String>, &str> = match (s.view, s.method_now()) {
                (View::Budget, _) => match s.budget_now() {
                    Some(Ok(b)) => {
                        let name = s.selected().map(|t| t.name.as_str());
                        Ok(crate::tui::views::budget::reason_items(b, name))
                    }
                    _ => Err("no notes here: the budget is not computed yet"),
                },
                (View::Phase, Some(MethodBody::Phase(r))) => {
                    Ok(crate::tui::views::phase::all_notes(&r.cautions, &r.notes))
                }
                (View::Phase, Some(MethodBody::Field(r))) => {
                    Ok(crate::tui::views::phase::all_notes(&r.cautions, &r.notes))
                }
                (View::Parallax, Some(MethodBody::Parallax(p))) => {
                    Ok(crate::tui::views::parallax::note_items(p))
                }
                (View::Chase, Some(MethodBody::Chase(c))) => {
                    Ok(crate::tui::views::chase_foot::items(c).0)
                }
                (View::Parallax | View::Phase | View::Chase, _) => Err(none_yet),
                _ => Err("m: notes in the Parallax (4), Phase (5), Chase (6) and Budget (7) views"),
            };
            match all {
                Ok(n) if !n.is_empty() => {
                    s.overlay = Some(Overlay::Question(Question::Notes {
                        notes: n,
                        scroll: 0,
                    }));
                }
                Ok(_) => say(s, "this report has no notes", Level::Info),
                Err(why) => say(s, why, Level::Info),
            }
            None
        }
        Action::Live => {
            s.live = !s.live;
            if s.live {
                say(s, "live: following the clock", Level::Info);
                let d = night_date(s.site(), s.now);
                if d != s.date {
                    return set_date(s, Some(d));
                }
            } else {
                say(s, "live off", Level::Info);
            }
            None
        }
        Action::Filter => {
            s.filtering = true;
            None
        }
        Action::Sort => {
            s.sort = s.sort.next();
            s.reorder();
            say(s, format!("sorted by {}", s.sort.label()), Level::Info);
            season_effect(s)
        }
        Action::SortReverse => {
            s.sort_rev = !s.sort_rev;
            s.reorder();
            season_effect(s)
        }
        Action::Add => {
            s.overlay = Some(Overlay::Form(Box::new(Form::blank())));
            None
        }
        Action::Edit => {
            if let Some(t) = s.selected() {
                s.overlay = Some(Overlay::Form(Box::new(Form::from_target(t))));
            }
            None
        }
        Action::Remove => {
            if let Some(t) = s.selected() {
                s.overlay = Some(Overlay::Question(Question::Remove(t.name.clone())));
            }
            None
        }
        Action::Undo => match s.undo.pop() {
            Some(prev) => {
                let keep = s.selected().map(|t| t.name.clone());
                let cur = std::mem::replace(&mut s.targets, prev);
                s.redo.push(cur);
                s.season.hours.clear();
                after_change(s, "undone".into(), keep)
            }
            None => {
                say(s, "nothing to undo", Level::Info);
                None
            }
        },
        Action::Redo => match s.redo.pop() {
            Some(next) => {
                let keep = s.selected().map(|t| t.name.clone());
                let cur = std::mem::replace(&mut s.targets, next);
                s.undo.push(cur);
                s.season.hours.clear();
                after_change(s, "redone".into(), keep)
            }
            None => {
                say(s, "nothing to redo", Level::Info);
                None
            }
        },
        Action::Save => save(s, false),
        Action::Sites => {
            let sel = s
                .sites
                .iter()
                .position(|x| x.name == s.site().name)
                .unwrap_or(0);
            s.overlay = Some(Overlay::Sites { sel });
            None
        }
        Action::SeasonStep => {
            s.season_step_days = if s.season_step_days == 7 { 1 } else { 7 };
            say(
                s,
                format!("season: every {} night(s)", s.season_step_days),
                Level::Info,
            );
            season_effect(s)
        }
        Action::PlanHoursUp | Action::PlanHoursDown => {
            let d = if a == Action::PlanHoursUp { 1.0 } else { -1.0 };
            let (lo, hi) = PLAN_HOURS_RANGE;
            s.plan_hours_per_night = (s.plan_hours_per_night + d).clamp(lo, hi);
            say(
                s,
                format!(
                    "plan export: {:.0} telescope hours a night (at most each night's dark time)",
                    s.plan_hours_per_night
                ),
                Level::Info,
            );
            None
        }
        Action::DetailDown | Action::DetailUp => {
            if s.detail_len().is_none() {
                let keys = format!(
                    "{} and {}",
                    keymap::keys_for(Scope::Main, Action::DetailDown),
                    keymap::keys_for(Scope::Main, Action::DetailUp)
                );
                say(
                    s,
                    format!(
                        "nothing to scroll here: {keys} scroll the Phase, Chase and Ladder lists and pick the Parallax epoch"
                    ),
                    Level::Info,
                );
                return None;
            }
            s.detail_scroll = if a == Action::DetailDown {
                (s.detail_scroll + 1).min(s.detail_max())
            } else {
                s.detail_scroll.saturating_sub(1).min(s.detail_max())
            };
            None
        }
        Action::MinAltUp | Action::MinAltDown => {
            let d = if a == Action::MinAltUp { 5.0 } else { -5.0 };
            let v = (s.settings.limits.min_alt_deg + d).clamp(0.0, 85.0);
            if let Ok(l) = Limits::new(v, s.settings.limits.sun_alt_deg) {
                s.settings = Arc::new(s.settings.with_limits(l));
            }
            say(s, format!("minimum altitude {v:.0}°"), Level::Info);
            recompute(s)
        }
        _ => None,
    }
}

/// "exported to DIR: a.json/.csv, b.md" when the files share a folder (files
/// with the same stem joined), else their full paths.
pub fn exported_text(files: &[std::path::PathBuf]) -> String {
    let dir = files.first().and_then(|f| f.parent());
    let same = dir.is_some() && files.iter().all(|f| f.parent() == dir);
    let Some(d) = dir.filter(|_| same) else {
        let names: Vec<String> = files.iter().map(|p| p.display().to_string()).collect();
        return format!("exported {}", names.join(", "));
    };
    let mut groups: Vec<(String, Vec<String>)> = Vec::new();
    for f in files {
        let stem = f
            .file_stem()
            .map(|x| x.to_string_lossy().into_owned())
            .unwrap_or_default();
        let ext = f
            .extension()
            .map(|x| format!(".{}", x.to_string_lossy()))
            .unwrap_or_default();
        match groups.iter_mut().find(|g| g.0 == stem) {
            Some(g) => g.1.push(ext),
            None => groups.push((stem, vec![ext])),
        }
    }
    let names: Vec<String> = groups
        .into_iter()
        .map(|(stem, exts)| format!("{stem}{}", exts.join("/")))
        .collect();
    format!("exported to {}: {}", d.display(), names.join(", "))
}

/// Apply one message; return the side effect it asks for.
pub fn update(s: &mut State, msg: Msg) -> Option<Effect> {
    match msg {
        Msg::Key(k) => {
            if k.kind != KeyEventKind::Press {
                return None;
            }
            if let Some((id, text)) = s.next_prompt.as_mut() {
                // Typing the seeing and comment of a visit marked done.
                match k.code {
                    KeyCode::Char(c) => text.push(c),
                    KeyCode::Backspace => {
                        text.pop();
                    }
                    KeyCode::Esc => {
                        s.next_prompt = None;
                        say(s, "not marked", Level::Info);
                    }
                    KeyCode::Enter => {
                        let (id, text) = (id.clone(), text.clone());
                        // A slip (a word that is not a signal-to-noise, a
                        // band the visit would not take, a seeing out of
                        // range) keeps the prompt, with what was typed, to
                        // mend.
                        let typed = match done_typed(&text)
                            .and_then(|t| check_typed(s, &id, &t).map(|_| t))
                        {
                            Ok(x) => x,
                            Err(e) => {
                                say(s, e.to_string(), Level::Warn);
                                return None;
                            }
                        };
                        s.next_prompt = None;
                        s.next_typed = Some((id.clone(), text));
                        return Some(next_effect(s, NextOp::Done { id, typed }));
                    }
                    _ => {}
                }
                return None;
            }
            let scope = s.scope();
            if let Some(a) = keymap::lookup(scope, &k) {
                return act(s, a);
            }
            let plain = !k
                .modifiers
                .intersects(KeyModifiers::CONTROL | KeyModifiers::ALT);
            match (scope, k.code) {
                (Scope::Form, KeyCode::Char(c)) if plain => {
                    match s.overlay.as_mut() {
                        Some(Overlay::Form(f)) => f.type_char(c),
                        Some(Overlay::BudgetAsk(f)) => f.type_char(c),
                        _ => {}
                    }
                    None
                }
                (Scope::Form, KeyCode::Backspace) => {
                    match s.overlay.as_mut() {
                        Some(Overlay::Form(f)) => f.backspace(),
                        Some(Overlay::BudgetAsk(f)) => f.backspace(),
                        _ => {}
                    }
                    None
                }
                (Scope::Filter, KeyCode::Char(c)) if plain => {
                    s.filter.push(c);
                    s.reorder();
                    season_effect(s)
                }
                (Scope::Filter, KeyCode::Backspace) => {
                    s.filter.pop();
                    s.reorder();
                    season_effect(s)
                }
                // The restore question waits for an answer: its "no" moves a
                // file, so a stray key must not give it.
                (Scope::Question, _)
                    if matches!(s.overlay, Some(Overlay::Question(Question::Restore(_)))) =>
                {
                    None
                }
                // The notes window scrolls with the arrows and page keys.
                (
                    Scope::Question,
                    KeyCode::Down | KeyCode::Up | KeyCode::PageDown | KeyCode::PageUp,
                ) if matches!(s.overlay, Some(Overlay::Question(Question::Notes { .. }))) => {
                    let body = (
                        s.size.0,
                        crate::tui::views::body_height(s, s.size.0, s.size.1),
                    );
                    if let Some(Overlay::Question(Question::Notes { notes, scroll })) =
                        s.overlay.as_mut()
                    {
                        let (lines, shown) =
                            crate::tui::views::overlays::notes_layout(notes, body.0, body.1);
                        let last = lines.len().saturating_sub(shown) as u16;
                        let page = (shown as u16).max(1);
                        *scroll = match k.code {
                            KeyCode::Down => scroll.saturating_add(1),
                            KeyCode::Up => scroll.saturating_sub(1),
                            KeyCode::PageDown => scroll.saturating_add(page),
                            _ => scroll.saturating_sub(page),
                        }
                        .min(last);
                    }
                    None
                }
                // Any other key closes a question with "no".
                (Scope::Question, _) => {
                    s.overlay = None;
                    None
                }
                _ => None,
            }
        }
        Msg::Act(a) => act(s, a),
        Msg::Tick(t) => {
            s.now = t;
            refresh_sky(s);
            let moved = follow_clock(s);
            if s.live {
                let d = night_date(s.site(), t);
                if d != s.date {
                    s.date = d;
                    return recompute(s);
                }
            }
            // The Next view ranks again each minute.
            if s.view == View::Next
                && s.next_prompt.is_none()
                && s.next
                    .as_ref()
                    .is_none_or(|d| t.seconds_since(&d.at).abs() >= 60.0)
            {
                return Effect::join(
                    Some(next_effect(s, NextOp::Refresh)),
                    if moved { season_effect(s) } else { None },
                );
            }
            if moved { season_effect(s) } else { None }
        }
        Msg::NextReady(d) => {
            if let Some(n) = &d.note {
                // A mark done is good news, said whole (wrapped at 80
                // columns, as every message but the passing ones).
                let warn = n.starts_with("not done");
                say(s, n, if warn { Level::Warn } else { Level::Good });
            }
            // A mark done refused (the plan or its log could not be
            // written, or the clock is outside the plan's nights): the
            // prompt again, with what was typed, to try again or drop.
            if let Some((typed_id, text)) = s.next_typed.take()
                && d.refused.as_ref() == Some(&typed_id)
            {
                s.next_prompt = Some((typed_id, text));
            }
            s.next = Some(*d);
            let n = s
                .next
                .as_ref()
                .and_then(|d| d.queue.as_ref().ok())
                .map_or(0, |q| q.rows.len());
            s.next_sel = s.next_sel.min(n.saturating_sub(1));
            None
        }
        Msg::Resize(w, h) => {
            s.size = (w, h);
            season_effect(s)
        }
        Msg::NightReady(d) => {
            if d.generation == s.night_gen {
                s.night = Some(*d);
                s.night_error = None;
                s.reorder();
            }
            None
        }
        Msg::NightFailed(e) => {
            say(s, format!("night not computed: {e}"), Level::Warn);
            s.night_error = Some(e);
            None
        }
        Msg::SeasonReady(r) => {
            if s.season.key.as_ref() == Some(&r.key) {
                s.season.nights = Some(r.nights);
                for (name, h) in r.rows {
                    s.season.pending.remove(&name);
                    s.season.hours.insert(name, h);
                }
                s.season.error = None;
            }
            season_effect(s)
        }
        Msg::SeasonFailed(key, e) => {
            if s.season.key.as_ref() == Some(&key) {
                s.season.pending.clear();
                s.season.error = Some(e);
            }
            None
        }
        Msg::Saved(Ok(sv)) => {
            let p = sv.path;
            s.programme.source = Some(p.clone());
            s.programme.save_path = p.clone();
            s.programme.is_demo = false;
            s.programme.original = None;
            s.programme.disk = sv.disk;
            match sv.merged {
                // Another session had saved meanwhile: what was written is the
                // merge, which this session now shows.
                Some(m) => {
                    let keep = s.selected().map(|t| t.name.clone());
                    let theirs = if m.theirs_changed.is_empty() {
                        String::new()
                    } else {
                        format!(" ({})", m.theirs_changed.join(", "))
                    };
                    s.targets = Arc::new(m.targets);
                    s.saved = s.targets.clone();
                    let e = after_change(
                        s,
                        format!(
                            "saved {}, merged with the changes another session saved to it{theirs}",
                            p.display()
                        ),
                        keep,
                    );
                    if let Some((text, _)) = s.message.clone() {
                        say(s, text, Level::Good);
                    }
                    e
                }
                None => {
                    s.saved = s.targets.clone();
                    say(s, format!("saved {}", p.display()), Level::Good);
                    Some(keep_edits(s))
                }
            }
        }
        Msg::SaveConflict(names) => {
            say(
                s,
                format!(
                    "NOT saved: another session saved {} meanwhile, and you both changed {}",
                    s.programme.save_path.display(),
                    names.join(", ")
                ),
                Level::Warn,
            );
            s.overlay = Some(Overlay::Question(Question::Overwrite(names)));
            None
        }
        Msg::RecoveryKept(Ok(())) => None,
        Msg::RecoveryKept(Err(e)) => {
            say(s, format!("unsaved edits NOT kept aside: {e}"), Level::Warn);
            None
        }
        Msg::BudgetReady(k, r) => {
            if s.budget_pending.as_ref() == Some(&*k) {
                s.budget_pending = None;
            }
            if s.budget_satisfies(&k) {
                s.budget = Some((*k, r));
            }
            None
        }
        Msg::BudgetPartial(settings, figures) => {
            if !crate::tui::state::same_settings(&settings, &s.settings) {
                return None;
            }
            let keep = s
                .budget_partial
                .as_ref()
                .is_some_and(|(st, _)| crate::tui::state::same_settings(st, &settings));
            if !keep {
                s.budget_partial = Some((settings, Default::default()));
            }
            if let Some((_, m)) = s.budget_partial.as_mut() {
                for (t, f) in figures {
                    let v: &mut Vec<_> = m.entry(t.name.clone()).or_default();
                    match v.iter_mut().find(|(mt, _)| *mt == t) {
                        Some(slot) => slot.1 = f,
                        None => v.push((t, f)),
                    }
                }
            }
            None
        }
        Msg::LadderReady(k, r) => {
            if s.ladder_pending.as_ref() == Some(&*k) {
                s.ladder_pending = None;
            }
            if *k == s.budget_key() {
                s.ladder = Some((*k, r));
            }
            None
        }
        Msg::BudgetExported(Ok(files)) => {
            let dir = files
                .first()
                .and_then(|f| f.parent())
                .map(|d| d.display().to_string())
                .unwrap_or_default();
            say(
                s,
                format!("exported {} budget files to {dir}", files.len()),
                Level::Good,
            );
            s.overlay = Some(Overlay::Question(Question::Exported(files)));
            None
        }
        Msg::BudgetExported(Err(e)) => {
            say(s, format!("NOT exported: {e}"), Level::Warn);
            None
        }
        Msg::Exported(Ok(files)) => {
            say(s, exported_text(&files), Level::Good);
            None
        }
        Msg::Exported(Err(e)) => {
            say(s, format!("NOT exported: {e}"), Level::Warn);
            None
        }
        Msg::MethodReady(r) => {
            if s.method_pending.as_ref() == Some(&r.key) {
                s.method_pending = None;
            }
            if s.method_key().as_ref() == Some(&r.key) {
                if s.method.as_ref().map(|m| &m.key) != Some(&r.key) {
                    s.detail_scroll = 0;
                }
                s.method = Some(*r);
            }
            None
        }
        Msg::Saved(Err(e)) => {
            say(s, format!("NOT saved: {e}"), Level::Warn);
            None
        }
    }
}
