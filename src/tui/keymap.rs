//! Key bindings as data: one table from key to [`Action`], per scope. `update`
//! looks keys up here and the help overlay is drawn from the same table, so the
//! two cannot disagree.

use crate::tui::msg::Action;
use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

/// Where a binding applies.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scope {
    /// The main screen, every view.
    Main,
    /// The target form.
    Form,
    /// Typing a roster filter.
    Filter,
    /// The site picker.
    Picker,
    /// A yes/no question.
    Question,
    /// The key overlay.
    Help,
}

impl Scope {
    /// Heading in the help overlay.
    pub fn title(&self) -> &'static str {
        match self {
            Scope::Main => "Everywhere",
            Scope::Form => "Target form",
            Scope::Filter => "Filter",
            Scope::Picker => "Site and instrument pickers",
            Scope::Question => "Questions",
            Scope::Help => "This overlay",
        }
    }
}

/// One binding.
#[derive(Debug, Clone, Copy)]
pub struct Binding {
    /// Where it applies.
    pub scope: Scope,
    /// The key.
    pub code: KeyCode,
    /// Modifiers that must be held (Shift is ignored for characters).
    pub mods: KeyModifiers,
    /// What it does.
    pub action: Action,
    /// Help text.
    pub help: &'static str,
}

const N: KeyModifiers = KeyModifiers::NONE;
const C: KeyModifiers = KeyModifiers::CONTROL;

const fn b(scope: Scope, code: KeyCode, action: Action, help: &'static str) -> Binding {
    Binding {
        scope,
        code,
        mods: N,
        action,
        help,
    }
}
const fn ch(scope: Scope, c: char, action: Action, help: &'static str) -> Binding {
    b(scope, KeyCode::Char(c), action, help)
}
const fn ctrl(scope: Scope, c: char, action: Action, help: &'static str) -> Binding {
    Binding {
        scope,
        code: KeyCode::Char(c),
        mods: C,
        action,
        help,
    }
}

use Action as A;
use Scope as S;

/// The key table.
pub const KEYMAP: &[Binding] = &[
    ch(S::Main, '1', A::ShowRoster, "Roster view"),
    ch(S::Main, '2', A::ShowTonight, "Tonight view"),
    ch(S::Main, '3', A::ShowSeason, "Season view"),
    ch(S::Main, '4', A::ShowParallax, "Parallax view"),
    ch(S::Main, '5', A::ShowPhase, "Phase view (pulsators)"),
    ch(S::Main, '6', A::ShowChase, "Chase view (transients)"),
    ch(S::Main, '7', A::ShowBudget, "Budget view"),
    ch(S::Main, 'x', A::Export, "export budget (CSV, MD)"),
    ch(S::Main, 'X', A::ExportPlan, "export plan, iCal, sheet"),
    b(S::Main, KeyCode::Tab, A::NextView, "next view"),
    b(S::Main, KeyCode::BackTab, A::PrevView, "previous view"),
    b(S::Main, KeyCode::Up, A::Up, "previous target"),
    ch(S::Main, 'k', A::Up, "previous target"),
    b(S::Main, KeyCode::Down, A::Down, "next target"),
    ch(S::Main, 'j', A::Down, "next target"),
    b(S::Main, KeyCode::PageUp, A::PageUp, "page up"),
    b(S::Main, KeyCode::PageDown, A::PageDown, "page down"),
    b(S::Main, KeyCode::Home, A::Top, "first target"),
    b(S::Main, KeyCode::End, A::Bottom, "last target"),
    b(S::Main, KeyCode::Left, A::NightBack, "night before"),
    b(S::Main, KeyCode::Right, A::NightFwd, "night after"),
    ch(S::Main, '[', A::WeekBack, "a week earlier"),
    ch(S::Main, ']', A::WeekFwd, "a week later"),
    ch(S::Main, '{', A::MonthBack, "a month earlier"),
    ch(S::Main, '}', A::MonthFwd, "a month later"),
    ch(S::Main, 'n', A::Today, "back to the current night"),
    ch(S::Main, 'L', A::Live, "live: follow the clock"),
    ch(S::Main, '/', A::Filter, "filter by typing"),
    ch(S::Main, 'o', A::Sort, "next sort column"),
    ch(S::Main, 'O', A::SortReverse, "reverse the sort"),
    ch(S::Main, 'a', A::Add, "add a target"),
    b(S::Main, KeyCode::Enter, A::Edit, "edit target and goal"),
    ch(S::Main, 'e', A::Edit, "edit target and goal"),
    ch(S::Main, 'd', A::Remove, "remove the target"),
    b(S::Main, KeyCode::Delete, A::Remove, "remove the target"),
    ch(S::Main, 'u', A::Undo, "undo"),
    ch(S::Main, 'U', A::Redo, "redo"),
    ch(S::Main, 'w', A::Save, "save the programme"),
    ctrl(S::Main, 's', A::Save, "save the programme"),
    ch(S::Main, 'p', A::Sites, "pick the site"),
    ch(S::Main, 'i', A::Instruments, "pick the instrument"),
    ch(S::Main, 'g', A::SeasonStep, "season: nightly or weekly"),
    ch(
        S::Main,
        'H',
        A::PlanHoursUp,
        "plan export: 1 h a night more",
    ),
    ch(
        S::Main,
        'h',
        A::PlanHoursDown,
        "plan export: 1 h a night less",
    ),
    ch(S::Main, 'J', A::DetailDown, "scroll the Phase/Chase list"),
    ch(
        S::Main,
        'K',
        A::DetailUp,
        "scroll the Phase/Chase list back",
    ),
    ch(S::Main, '+', A::MinAltUp, "minimum altitude +5°"),
    ch(S::Main, '-', A::MinAltDown, "minimum altitude -5°"),
    ch(S::Main, '?', A::Help, "show the keys"),
    ch(S::Main, 'q', A::Quit, "quit"),
    ctrl(S::Main, 'c', A::Quit, "quit"),
    b(S::Form, KeyCode::Tab, A::NextField, "next field"),
    b(S::Form, KeyCode::Down, A::NextField, "next field"),
    b(S::Form, KeyCode::BackTab, A::PrevField, "previous field"),
    b(S::Form, KeyCode::Up, A::PrevField, "previous field"),
    b(S::Form, KeyCode::Right, A::NextChoice, "next kind or band"),
    b(
        S::Form,
        KeyCode::Left,
        A::PrevChoice,
        "previous kind or band",
    ),
    b(S::Form, KeyCode::Enter, A::Accept, "check and keep"),
    b(S::Form, KeyCode::Esc, A::Cancel, "drop the changes"),
    b(S::Filter, KeyCode::Enter, A::Accept, "keep the filter"),
    b(S::Filter, KeyCode::Esc, A::Cancel, "clear the filter"),
    b(S::Picker, KeyCode::Up, A::Up, "previous entry"),
    b(S::Picker, KeyCode::Down, A::Down, "next entry"),
    b(S::Picker, KeyCode::Enter, A::Accept, "use this one"),
    b(S::Picker, KeyCode::Esc, A::Cancel, "keep the current one"),
    ch(S::Question, 'y', A::Yes, "yes"),
    ch(S::Question, 'n', A::No, "no"),
    b(S::Question, KeyCode::Esc, A::No, "no"),
    ctrl(
        S::Question,
        'c',
        A::QuitDiscard,
        "quit at once (unsaved edits kept for the next start)",
    ),
    b(S::Help, KeyCode::Esc, A::Cancel, "close"),
    ch(S::Help, '?', A::Cancel, "close"),
    ch(S::Help, 'q', A::Cancel, "close"),
    b(S::Help, KeyCode::Down, A::Down, "scroll"),
    b(S::Help, KeyCode::Up, A::Up, "scroll"),
];

fn same_key(b: &Binding, k: &KeyEvent) -> bool {
    let mut mods = k.modifiers;
    if matches!(k.code, KeyCode::Char(_)) {
        mods.remove(KeyModifiers::SHIFT);
    }
    if k.code == KeyCode::BackTab {
        mods.remove(KeyModifiers::SHIFT);
    }
    let code = match k.code {
        // Some terminals send Ctrl+letter as the upper-case letter.
        KeyCode::Char(c) if mods.contains(KeyModifiers::CONTROL) => {
            KeyCode::Char(c.to_ascii_lowercase())
        }
        c => c,
    };
    b.code == code && b.mods == mods
}

/// The action bound to a key in a scope.
pub fn lookup(scope: Scope, k: &KeyEvent) -> Option<Action> {
    KEYMAP
        .iter()
        .find(|b| b.scope == scope && same_key(b, k))
        .map(|b| b.action)
}

/// How a key is written in the help overlay.
pub fn key_name(code: KeyCode, mods: KeyModifiers) -> String {
    let base = match code {
        KeyCode::Char(' ') => "Space".to_string(),
        KeyCode::Char(c) => c.to_string(),
        KeyCode::Up => "↑".into(),
        KeyCode::Down => "↓".into(),
        KeyCode::Left => "←".into(),
        KeyCode::Right => "→".into(),
        KeyCode::Enter => "Enter".into(),
        KeyCode::Esc => "Esc".into(),
        KeyCode::Tab => "Tab".into(),
        KeyCode::BackTab => "Shift-Tab".into(),
        KeyCode::PageUp => "PgUp".into(),
        KeyCode::PageDown => "PgDn".into(),
        KeyCode::Home => "Home".into(),
        KeyCode::End => "End".into(),
        KeyCode::Delete => "Del".into(),
        KeyCode::Backspace => "Bksp".into(),
        other => format!("{other:?}"),
    };
    if mods.contains(KeyModifiers::CONTROL) {
        format!("Ctrl-{base}")
    } else {
        base
    }
}

/// Help lines of a scope: (keys, what they do), keys that do the same thing joined.
pub fn help_lines(scope: Scope) -> Vec<(String, &'static str)> {
    let mut out: Vec<(Action, String, &'static str)> = Vec::new();
    for b in KEYMAP.iter().filter(|b| b.scope == scope) {
        let name = key_name(b.code, b.mods);
        if let Some(e) = out.iter_mut().find(|e| e.0 == b.action && e.2 == b.help) {
            e.1.push(' ');
            e.1.push_str(&name);
        } else {
            out.push((b.action, name, b.help));
        }
    }
    out.into_iter().map(|(_, k, h)| (k, h)).collect()
}

/// The keys bound to an action in a scope, as shown to the user (e.g. "w Ctrl-s").
pub fn keys_for(scope: Scope, action: Action) -> String {
    KEYMAP
        .iter()
        .filter(|b| b.scope == scope && b.action == action)
        .map(|b| key_name(b.code, b.mods))
        .collect::<Vec<_>>()
        .join(" ")
}
