//! Key bindings as data: one table from key to [`Action`], per scope. `update`
//! looks keys up here and the help overlay is drawn from the same table, so the
//! two cannot disagree.

use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

/// What a key can be bound to. Every binding in [`KEYMAP`] names one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Action {
    /// Leave (asks first when there are unsaved changes).
    Quit,
    /// Leave without saving (from the unsaved-changes question).
    QuitDiscard,
    /// Open or close the key overlay.
    Help,
    /// Next view.
    NextView,
    /// Previous view.
    PrevView,
    /// The Roster view.
    ShowRoster,
    /// The Tonight view.
    ShowTonight,
    /// The Season view.
    ShowSeason,
    /// The Parallax view (parallax targets).
    ShowParallax,
    /// The Phase view (pulsators).
    ShowPhase,
    /// The Chase view (transients).
    ShowChase,
    /// Pick the instrument.
    Instruments,
    /// The Budget view.
    ShowBudget,
    /// The Next view (what to observe now).
    ShowNext,
    /// Next view: mark the selected visit done (then type seeing, measured signal-to-noise and a comment).
    MarkDone,
    /// Next view: mark the selected visit lost.
    MarkLost,
    /// Next view: mark the rest of the night lost.
    LoseNight,
    /// Next view: re-plan everything not done from now on.
    Replan,
    /// The Ladder view (the distance ladder of the programme).
    ShowLadder,
    /// Export the budget (CSV, Markdown, LaTeX, the figure, the
    /// justification) to the Budget view's export folder.
    Export,
    /// The Budget view's request: hours asked, range, export folder.
    BudgetAsk,
    /// Schedule the Season view's span and export the plan (JSON, CSV,
    /// iCalendar) and tonight's night sheet beside the programme file.
    ExportPlan,
    /// Selection up one row.
    Up,
    /// Selection down one row.
    Down,
    /// Selection up one page.
    PageUp,
    /// Selection down one page.
    PageDown,
    /// First row.
    Top,
    /// Last row.
    Bottom,
    /// One night earlier.
    NightBack,
    /// One night later.
    NightFwd,
    /// One week earlier.
    WeekBack,
    /// One week later.
    WeekFwd,
    /// One month earlier.
    MonthBack,
    /// One month later.
    MonthFwd,
    /// Back to the current night.
    Today,
    /// Follow the clock (the night and the time marker move on their own).
    Live,
    /// Every note and caution of the Phase view's report, wrapped in a window.
    Notes,
    /// Type to filter the roster.
    Filter,
    /// Next sort column.
    Sort,
    /// Reverse the sort order.
    SortReverse,
    /// Add a target.
    Add,
    /// Edit the selected target.
    Edit,
    /// Remove the selected target (asks first).
    Remove,
    /// Undo the last change to the programme.
    Undo,
    /// Redo what was undone.
    Redo,
    /// Save the programme (atomically).
    Save,
    /// Pick the site.
    Sites,
    /// Season strip: every night or every week.
    SeasonStep,
    /// Raise the minimum altitude by 5°.
    MinAltUp,
    /// Lower the minimum altitude by 5°.
    MinAltDown,
    /// Form, picker, filter: confirm.
    Accept,
    /// Form, picker, filter, overlay: close without change.
    Cancel,
    /// Form: next field.
    NextField,
    /// Form: previous field.
    PrevField,
    /// Form: next value of a choice field (kind, band).
    NextChoice,
    /// Form: previous value of a choice field.
    PrevChoice,
    /// Plan export: one telescope hour a night more.
    PlanHoursUp,
    /// Plan export: one telescope hour a night less.
    PlanHoursDown,
    /// Scroll the view's detail list (Chase timeline) down a row.
    DetailDown,
    /// Scroll the view's detail list up a row.
    DetailUp,
    /// Question: yes.
    Yes,
    /// Question: no.
    No,
}

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
    ch(S::Main, '8', A::ShowNext, "Next view: what to observe now"),
    ch(
        S::Main,
        'D',
        A::MarkDone,
        "Next: mark the selected visit done",
    ),
    ch(
        S::Main,
        'B',
        A::MarkLost,
        "Next: mark the selected visit lost",
    ),
    ch(
        S::Main,
        'N',
        A::LoseNight,
        "Next: mark the rest of the night lost",
    ),
    ch(S::Main, 'R', A::Replan, "Next: re-plan from now"),
    ch(S::Main, '2', A::ShowTonight, "Tonight view"),
    ch(S::Main, '3', A::ShowSeason, "Season view"),
    ch(S::Main, '4', A::ShowParallax, "Parallax view"),
    ch(S::Main, '5', A::ShowPhase, "Phase view (pulsators)"),
    ch(S::Main, '6', A::ShowChase, "Chase view (transients)"),
    ch(S::Main, '7', A::ShowBudget, "Budget view"),
    ch(S::Main, '9', A::ShowLadder, "Ladder view (distance ladder)"),
    ch(S::Main, 'x', A::Export, "export budget (CSV MD TeX SVG)"),
    ch(S::Main, 'b', A::BudgetAsk, "budget: hours asked, range"),
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
    ch(
        S::Main,
        'm',
        A::Notes,
        "all notes: Parallax, Phase, Chase, Budget",
    ),
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
    ch(
        S::Main,
        'J',
        A::DetailDown,
        "scroll the lists; next Parallax epoch",
    ),
    ch(
        S::Main,
        'K',
        A::DetailUp,
        "scroll back; previous Parallax epoch",
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
