//! The one [`State`] of the UI and the results cached in it.

use crate::astro::frames::Context;
use crate::astro::night::{Limits, NightEvents};
use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::io::targets::Target;
use crate::programme::Settings;
use crate::tui::form::Form;
use crate::tui::keymap::Scope;
use crate::tui::theme::Theme;
use chrono::NaiveDate;
use std::collections::{HashMap, HashSet};
use std::path::PathBuf;
use std::sync::Arc;

/// The views (names are rung's own).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    /// Every target with tonight's window.
    Roster,
    /// Altitude through the night.
    Tonight,
    /// Observable hours, targets × nights.
    Season,
    /// The parallax factor through the years, with the chosen epochs.
    Parallax,
    /// A pulsator's phase coverage and next reachable phases.
    Phase,
    /// A transient's follow-up timeline.
    Chase,
    /// Hours and precision against each target's goal.
    Budget,
    /// What to observe now, ranked, with tonight's planned visits to mark.
    Next,
    /// The distance ladder: the chain, the end point's budget by rung, the best next hour.
    Ladder,
}

impl View {
    /// All views in tab order.
    pub const ALL: [View; 9] = [
        View::Roster,
        View::Tonight,
        View::Season,
        View::Parallax,
        View::Phase,
        View::Chase,
        View::Budget,
        View::Next,
        View::Ladder,
    ];
    /// Tab label.
    pub fn title(&self) -> &'static str {
        match self {
            View::Roster => "Roster",
            View::Tonight => "Tonight",
            View::Season => "Season",
            View::Parallax => "Parallax",
            View::Phase => "Phase",
            View::Chase => "Chase",
            View::Budget => "Budget",
            View::Next => "Next",
            View::Ladder => "Ladder",
        }
    }
    fn index(&self) -> usize {
        View::ALL.iter().position(|v| v == self).unwrap_or(0)
    }
    /// The view `d` tabs away.
    pub fn step(&self, d: i32) -> View {
        let n = View::ALL.len() as i32;
        View::ALL[(self.index() as i32 + d).rem_euclid(n) as usize]
    }
}

/// The Next view's queue (`crate::plan::now::queue`) and the plan it ranks.
#[derive(Debug, Clone)]
pub struct NextData {
    /// The instant ranked.
    pub at: Instant,
    /// The ranking, or why there is none.
    pub queue: Result<crate::plan::now::Queue, String>,
    /// The plan, as saved after the last mark.
    pub plan: Option<crate::plan::file::PlanFile>,
    /// What the last mark or re-plan did.
    pub note: Option<String>,
    /// The visit whose mark done was refused (nothing written), when the
    /// last job was one.
    pub refused: Option<String>,
}

/// Roster sort columns.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SortKey {
    /// File order.
    File,
    /// Name.
    Name,
    /// Kind.
    Kind,
    /// Start of tonight's main window.
    Window,
    /// Observable hours tonight.
    Hours,
    /// Best airmass tonight.
    Airmass,
    /// Moon distance at the best time.
    Moon,
    /// Priority (higher first).
    Priority,
}

impl SortKey {
    /// All, in the order `Sort` steps through them.
    pub const ALL: [SortKey; 8] = [
        SortKey::File,
        SortKey::Name,
        SortKey::Kind,
        SortKey::Window,
        SortKey::Hours,
        SortKey::Airmass,
        SortKey::Moon,
        SortKey::Priority,
    ];
    /// Label.
    pub fn label(&self) -> &'static str {
        match self {
            SortKey::File => "file order",
            SortKey::Name => "name",
            SortKey::Kind => "kind",
            SortKey::Window => "window start",
            SortKey::Hours => "hours",
            SortKey::Airmass => "airmass",
            SortKey::Moon => "Moon distance",
            SortKey::Priority => "priority",
        }
    }
    /// The next sort column.
    pub fn next(&self) -> SortKey {
        let i = SortKey::ALL.iter().position(|k| k == self).unwrap_or(0);
        SortKey::ALL[(i + 1) % SortKey::ALL.len()]
    }
}

/// Where the programme came from and where saves go.
#[derive(Debug, Clone, PartialEq)]
pub struct Programme {
    /// The file read at start, if any.
    pub source: Option<PathBuf>,
    /// Where saves are written.
    pub save_path: PathBuf,
    /// Whether the programme is the demo (never overwritten).
    pub is_demo: bool,
    /// Rows of the source refused when loading (a save keeps them in the file
    /// as they are when the file's layout is known, else only in the backup copy).
    pub refused_rows: usize,
    /// The source file's bytes as loaded; written once as a backup before the first save over it.
    pub original: Option<Vec<u8>>,
    /// The source file as written (comments, column order, refused rows), for
    /// saves that keep it even when every target read from it is removed.
    pub layout: Option<std::sync::Arc<crate::io::csv_text::Layout>>,
    /// Fingerprint of the bytes of the file at `save_path` as this session
    /// last read or wrote them (`None`: there was no file): a save that finds
    /// other bytes there merges with them ([`crate::io::merge`]).
    pub disk: Option<u64>,
    /// `Some(pid)` when another session held the programme at start: this
    /// session's unsaved edits then go to `<file>.unsaved-<pid>`
    /// ([`crate::io::session`]).
    pub instance: Option<u32>,
}

impl Programme {
    /// The programme's text as a save writes it: the targets in the layout of
    /// the file they were read from (see [`crate::io::write_targets`]).
    pub fn text_of(&self, targets: &[crate::io::targets::Target]) -> String {
        let layout = crate::io::write_targets::layout_of(targets).or_else(|| self.layout.clone());
        crate::io::write_targets::to_csv_in(layout.as_ref(), targets)
    }
}

impl Programme {
    /// Where the backup copy of the original goes.
    pub fn backup_path(&self) -> PathBuf {
        crate::io::atomic::backup_path(&self.save_path)
    }

    /// Where unsaved edits are kept while the UI runs: written (atomically)
    /// after every change that leaves the programme unsaved, removed once it is
    /// saved or the user chooses to drop the edits. A session that ends without
    /// either (a signal, a panic, a closed terminal, a power cut) leaves it for
    /// the next start to offer back.
    pub fn recovery_path(&self) -> PathBuf {
        crate::io::session::recovery_path(&self.save_path, self.instance)
    }

    /// The fingerprint of the file at `path` now (`None` when there is none).
    pub fn disk_now(path: &std::path::Path) -> Option<u64> {
        std::fs::read(path)
            .ok()
            .map(|b| crate::io::merge::bytes_fingerprint(&b))
    }
}

/// Where an offered-back recovery file is moved when the user declines it
/// (`<file>.unsaved.old`, one copy, so nothing is deleted unasked).
pub fn declined_recovery_path(recovery: &std::path::Path) -> PathBuf {
    crate::io::atomic::with_suffix(recovery, ".old")
}

/// Unsaved edits left by an earlier session, found at start.
#[derive(Debug, Clone, PartialEq)]
pub struct Recovered {
    /// The recovery file.
    pub path: PathBuf,
    /// The programme it holds.
    pub targets: Vec<Target>,
    /// When it was last written (local time text), if known.
    pub written: Option<String>,
    /// What restoring does beyond bringing the edits back (edits made on an
    /// earlier version of the file are merged with what was saved since).
    pub note: Option<String>,
}

/// One target in one night, as the views show it: its row of the night's
/// table (`plan::night_table`), the very row `rung night` prints.
pub type TargetRow = crate::plan::night_table::NightRow;

/// The night table: computed by the library off the draw path.
#[derive(Debug, Clone)]
pub struct NightData {
    /// Generation of the job that made it.
    pub generation: u64,
    /// Site name.
    pub site: String,
    /// Local date of the evening.
    pub date: NaiveDate,
    /// Limits used for the windows.
    pub limits: Limits,
    /// Sun and Moon events.
    pub events: NightEvents,
    /// Local noon to local noon.
    pub start: Instant,
    /// End of the span.
    pub end: Instant,
    /// Grid instants as seconds since `start`.
    pub grid_s: Vec<f64>,
    /// Sun altitude on the grid, degrees.
    pub sun_alt_deg: Vec<f64>,
    /// Moon altitude on the grid, degrees.
    pub moon_alt_deg: Vec<f64>,
    /// Per target, by name.
    pub rows: HashMap<String, TargetRow>,
    /// Per target, by name: observed altitude on the grid, degrees (for the
    /// Tonight chart; `plan::night_table::altitude_track`).
    pub tracks: HashMap<String, Vec<f32>>,
}

/// What a season strip is for.
#[derive(Debug, Clone, PartialEq)]
pub struct SeasonKey {
    /// Site name.
    pub site: String,
    /// First night.
    pub from: NaiveDate,
    /// Days between columns.
    pub step_days: u32,
    /// Number of columns.
    pub nights: u32,
    /// Limits.
    pub limits: Limits,
}

/// The prepared nights of a season strip (season engine), shared by its jobs.
#[derive(Debug, Clone)]
pub struct SeasonSky {
    /// What does not change from night to night.
    pub setup: crate::plan::season::ScanSetup,
    /// One night per column.
    pub skies: Vec<crate::plan::season::NightSky>,
}

/// The season strip: observable hours per target and night.
#[derive(Debug, Clone, Default)]
pub struct SeasonData {
    /// What the cached rows are for.
    pub key: Option<SeasonKey>,
    /// The nights, once computed.
    pub nights: Option<Arc<SeasonSky>>,
    /// Hours by target name.
    pub hours: HashMap<String, Vec<f64>>,
    /// Targets being computed.
    pub pending: HashSet<String>,
    /// The last failure.
    pub error: Option<String>,
}

/// Whether two settings are the same: the same `Arc` (the usual case, cheap),
/// or equal values.
pub fn same_settings(a: &Arc<Settings>, b: &Arc<Settings>) -> bool {
    Arc::ptr_eq(a, b) || a == b
}

/// Whether two programmes are the same: the same `Arc` (a key made from the
/// state's programme, cheap even at 10,000 targets), or equal values.
pub fn same_targets(a: &Arc<Vec<Target>>, b: &Arc<Vec<Target>>) -> bool {
    Arc::ptr_eq(a, b) || a == b
}

/// Whether a budget's key holds the target `t`: at once when the key's
/// programme is `now` (the state's) and `t` one of its elements (a row
/// drawn), else by looking (a linear search, 10,000 comparisons a row at
/// 10,000 targets).
fn key_holds(k: &BudgetKey, now: &Arc<Vec<Target>>, t: &Target) -> bool {
    (Arc::ptr_eq(&k.targets, now) && now.as_ptr_range().contains(&std::ptr::from_ref(t)))
        || k.targets.contains(t)
}

/// What a distance-method report is for: a target (as it is now) and the
/// programme's settings (site, range, limits, instrument, methods).
#[derive(Debug, Clone)]
pub struct MethodKey {
    /// The view (Parallax, Phase or Chase).
    pub view: View,
    /// The target.
    pub target: crate::io::targets::Target,
    /// The settings it is computed with.
    pub settings: Arc<Settings>,
    /// In the Phase view, when the target is a field or one of its stars:
    /// the field's row and its stars (the field is planned as one unit);
    /// else empty.
    pub field: Vec<crate::io::targets::Target>,
    /// The programme, when the target's report needs it (a transient whose
    /// `host` names a field: its host's planned distance; a field in the
    /// Phase view: its distance on the anchors' zero point); else empty.
    pub programme: Vec<crate::io::targets::Target>,
    /// The programme's file, for messages that name it.
    pub file: Option<std::path::PathBuf>,
}

impl PartialEq for MethodKey {
    fn eq(&self, o: &Self) -> bool {
        self.view == o.view
            && self.target == o.target
            && self.field == o.field
            && same_settings(&self.settings, &o.settings)
            && self.programme == o.programme
    }
}

/// A distance-method report, computed by the library.
#[derive(Debug, Clone, PartialEq)]
pub enum MethodBody {
    /// `ParallaxMethod::plan` over the range.
    Parallax(Box<crate::ladder::parallax::ParallaxPlan>),
    /// `PulsatorMethod::analyse` over the range.
    Phase(Box<crate::ladder::pulsator::PhaseReport>),
    /// `TransientMethod::chase`.
    Chase(Box<crate::ladder::transient::Chase>),
    /// `Settings::field_report`: a field as one unit (the Phase view of a
    /// field or of one of its stars).
    Field(Box<crate::ladder::field::FieldReport>),
    /// A calibrator already observed (its peak's error given): nothing to
    /// chase; its calibration as the ladder carries it (`rung chase` says the same).
    Calibrated(Box<crate::ladder::chain::CalibratorRow>),
    /// The selected target is not of the view's kind.
    NotApplicable(String),
    /// The library refused (the message says why).
    Failed(String),
}

/// A report with what it is for.
#[derive(Debug, Clone, PartialEq)]
pub struct MethodResult {
    /// What it is for.
    pub key: MethodKey,
    /// The report.
    pub body: MethodBody,
}

/// The nights to build ahead (`Effect::Nights`): every night from `from`
/// to `to` at `site`.
#[derive(Debug, Clone, PartialEq)]
pub struct NightsJob {
    /// Site.
    pub site: Site,
    /// First night.
    pub from: chrono::NaiveDate,
    /// Last night.
    pub to: chrono::NaiveDate,
}

/// What a budget is for: the programme, its settings, the hours asked, and
/// whether each target's inverse curve is wanted (the Budget view's shares
/// and figure need them; the Roster's progress column does not).
#[derive(Debug, Clone)]
pub struct BudgetKey {
    /// The programme (the state's own, shared).
    pub targets: Arc<Vec<crate::io::targets::Target>>,
    /// The settings it is computed with.
    pub settings: Arc<Settings>,
    /// The hours asked (the Budget view's request).
    pub asked: Option<crate::plan::budget::Asked>,
    /// Each target's inverse curve.
    pub curves: bool,
    /// The programme's file, for messages that name it.
    pub file: Option<std::path::PathBuf>,
    /// Targets (indices into `targets`) computed first: the rows on screen
    /// and near the cursor when the budget was asked. Not part of what the
    /// budget is for (two keys that differ here are equal).
    pub first: Vec<usize>,
    /// How many of `first` are the rows on screen: the budget's first
    /// batch (the screen is full when it ends). Not part of what the budget
    /// is for either.
    pub first_shown: usize,
}

/// What the budget says of one target before the whole budget is ready
/// (`Msg::BudgetPartial`): the method's σd/d (percent) and verdict, the same
/// figures as the budget's row, or why the method gives nothing.
pub type PartialFigure = std::result::Result<(f64, crate::ladder::Verdict), String>;

/// Per target name, the targets of that name and their figures, with the
/// settings they were computed for.
pub type PartialFigures = (
    Arc<Settings>,
    std::collections::HashMap<String, Vec<(crate::io::targets::Target, PartialFigure)>>,
);

impl PartialEq for BudgetKey {
    fn eq(&self, o: &Self) -> bool {
        same_settings(&self.settings, &o.settings)
            && same_targets(&self.targets, &o.targets)
            && self.asked == o.asked
            && self.curves == o.curves
    }
}

/// A target's progress towards its distance goal, as the Roster shows it.
#[derive(Debug, Clone, PartialEq)]
pub enum Progress {
    /// The target has no distance goal.
    NoGoal,
    /// The budget is being computed.
    Pending {
        /// Goal σd/d, percent.
        goal_pct: f64,
    },
    /// The method's prediction over the budget's months.
    Predicted {
        /// What the method reaches, percent (not finite when nothing can be observed).
        achievable_pct: f64,
        /// Goal σd/d, percent.
        goal_pct: f64,
        /// Whether the goal is reachable in the range.
        reached: bool,
        /// The method's verdict.
        verdict: crate::ladder::Verdict,
    },
    /// The budget left the target out (no method, or the method failed) or failed.
    Unavailable {
        /// Goal σd/d, percent.
        goal_pct: f64,
        /// Why.
        why: String,
    },
}

/// Telescope hours per night the plan export schedules at first (at most the
/// dark time of each night); `h` and `H` change it in steps of an hour.
pub const PLAN_HOURS_PER_NIGHT: f64 = 8.0;

/// The sky at the current instant.
#[derive(Debug, Clone)]
pub struct SkyNow {
    /// Context at `now` (full SOFA apco13).
    pub ctx: Context,
    /// Sun altitude, degrees.
    pub sun_alt_deg: f64,
    /// Moon altitude, degrees.
    pub moon_alt_deg: f64,
    /// Moon illuminated fraction.
    pub moon_illumination: f64,
    /// Whether the Moon waxes.
    pub moon_waxing: bool,
    /// Sun caution for the selected target now.
    pub caution: Option<String>,
}

/// An overlay on top of the views.
#[derive(Debug, Clone, PartialEq)]
pub enum Overlay {
    /// The keys.
    Help {
        /// First line shown.
        scroll: u16,
    },
    /// Site picker.
    Sites {
        /// Highlighted site.
        sel: usize,
    },
    /// Instrument picker.
    Instruments {
        /// Highlighted instrument.
        sel: usize,
    },
    /// Target form.
    Form(Box<Form>),
    /// The Budget view's request form (hours asked, range, export folder).
    BudgetAsk(Box<crate::tui::ask::AskForm>),
    /// A yes/no question.
    Question(Question),
}

/// Questions asked before something is lost.
#[derive(Debug, Clone, PartialEq)]
pub enum Question {
    /// Quit with unsaved changes?
    Quit,
    /// Remove this target?
    Remove(String),
    /// Restore the unsaved edits an earlier session left?
    Restore(Box<Recovered>),
    /// The file changed since this session read it and both changed these
    /// targets: overwrite it with this session's programme?
    Overwrite(Vec<String>),
    /// Every caution and note of the view's report or the Budget view's
    /// selected target, from line `scroll` of the window (↑/↓ and the page
    /// keys scroll it, any other key closes it).
    Notes {
        /// The notes, each whole.
        notes: Vec<String>,
        /// First line shown.
        scroll: u16,
    },
    /// Files written by an export, each named in full (any key closes it).
    Exported(Vec<std::path::PathBuf>),
}

/// How a message reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Level {
    /// Information.
    Info,
    /// Something done.
    Good,
    /// Something refused or failed.
    Warn,
}

/// Telescope hours per night the plan export may use: the smallest and largest setting.
pub const PLAN_HOURS_RANGE: (f64, f64) = (1.0, 14.0);

/// Longest undo history kept.
pub const UNDO_DEPTH: usize = 200;

/// The whole UI state.
#[derive(Debug, Clone)]
pub struct State {
    /// The programme's settings (site, instrument, range, limits, goal,
    /// methods), resolved once (`crate::programme`); a choice made in the UI
    /// (site, instrument, minimum altitude) replaces them with new ones.
    pub settings: Arc<Settings>,
    /// Sites the picker offers.
    pub sites: Vec<Site>,
    /// Local date of the evening shown.
    pub date: NaiveDate,
    /// Follow the clock.
    pub live: bool,
    /// The clock (set by `Tick`).
    pub now: Instant,
    /// The sky now.
    pub sky: Option<SkyNow>,
    /// The programme (shared with the jobs that compute for it: a key
    /// that holds it costs no copy, and compares by pointer first).
    pub targets: Arc<Vec<Target>>,
    /// The programme as last saved or loaded (unsaved changes = differs from this).
    pub saved: Arc<Vec<Target>>,
    /// Earlier programmes, newest last.
    pub undo: Vec<Arc<Vec<Target>>>,
    /// Undone programmes, newest last.
    pub redo: Vec<Arc<Vec<Target>>>,
    /// Files.
    pub programme: Programme,
    /// Current view.
    pub view: View,
    /// Selected row in `order`.
    pub sel: usize,
    /// Indices into `targets`, sorted and filtered.
    pub order: Vec<usize>,
    /// Sort column.
    pub sort: SortKey,
    /// Reverse order.
    pub sort_rev: bool,
    /// Filter text.
    pub filter: String,
    /// Typing the filter.
    pub filtering: bool,
    /// Overlay, if any.
    pub overlay: Option<Overlay>,
    /// The night table, when computed.
    pub night: Option<NightData>,
    /// Generation of the newest night job.
    pub night_gen: u64,
    /// The last failure to compute the night.
    pub night_error: Option<String>,
    /// Season strip.
    pub season: SeasonData,
    /// Days between season columns.
    pub season_step_days: u32,
    /// Instruments the picker offers.
    pub instruments: Vec<String>,
    /// Telescope hours per night the plan export schedules.
    pub plan_hours_per_night: f64,
    /// First row of the current view's detail list (the Chase timeline),
    /// scrolled apart from the target selection; reset when the report changes.
    pub detail_scroll: usize,
    /// The last distance-method report.
    pub method: Option<MethodResult>,
    /// The report being computed.
    pub method_pending: Option<MethodKey>,
    /// The last budget (or why it failed).
    pub budget: Option<(BudgetKey, Result<Box<crate::plan::budget::Budget>, String>)>,
    /// The budget being computed.
    pub budget_pending: Option<BudgetKey>,
    /// The nights last asked to be built ahead for the budget
    /// (`Effect::Nights`): asked again only when the site or range changes.
    pub nights_asked: Option<NightsJob>,
    /// Targets' figures from a budget still being computed, shown until the
    /// whole budget arrives.
    pub budget_partial: Option<PartialFigures>,
    /// The last distance ladder (or why it does not close), for the
    /// programme and settings of its key.
    pub ladder: Option<(
        BudgetKey,
        Result<Box<crate::ladder::chain::LadderReport>, String>,
    )>,
    /// The ladder being computed.
    pub ladder_pending: Option<BudgetKey>,
    /// The Budget view's request: hours asked, export folder.
    pub budget_ask: crate::tui::ask::BudgetAsk,
    /// Message line.
    pub message: Option<(String, Level)>,
    /// Terminal size (columns, rows).
    pub size: (u16, u16),
    /// Styles.
    pub theme: Theme,
    /// Set when the UI should end.
    pub quit: bool,
    /// The plan the Next view ranks and marks (`rung tui --plan FILE`).
    pub plan_file: Option<std::path::PathBuf>,
    /// The Next view's queue, when computed.
    pub next: Option<NextData>,
    /// The Next view's selected row.
    pub next_sel: usize,
    /// Typing the seeing and comment of a visit being marked done: (visit id, text).
    pub next_prompt: Option<(String, String)>,
    /// A mark done on its way to the plan file: (visit id, text typed), kept
    /// so that a refused mark gives the prompt back with the text.
    pub next_typed: Option<(String, String)>,
}

/// Rows of chrome around a view: status, tabs, message line.
pub const CHROME_ROWS: u16 = 3;
/// Season columns.
pub const SEASON_NIGHTS: u32 = 52;

/// The first row shown in a list of `len` rows with `sel` selected, `height` rows tall.
pub fn scroll_offset(sel: usize, height: usize) -> usize {
    if height == 0 {
        return 0;
    }
    sel.saturating_sub(height - 1)
}

/// Steps the Ladder view lists under "Best next hour".
pub const LADDER_NEXT_ROWS: u16 = 3;

/// Rows of the Ladder view other than the chain's: title, end point and
/// header; the budget's heading, a line for each rung and the hours by rung;
/// the best next hours with their heading.
pub const LADDER_FIXED_ROWS: u16 =
    3 + 1 + crate::ladder::chain::Rung::ALL.len() as u16 + 1 + 1 + LADDER_NEXT_ROWS;

/// Rows of the detail list a view shows in a view area `area_h` rows tall
/// (Phase: title, coverage and header rows above, three foot rows below;
/// Chase: title and header above, three below).
pub fn detail_rows(view: View, area_h: u16) -> usize {
    match view {
        View::Phase => area_h.saturating_sub(6) as usize,
        View::Chase => area_h.saturating_sub(5) as usize,
        View::Ladder => area_h.saturating_sub(LADDER_FIXED_ROWS) as usize,
        // One epoch at a time: the keys pick it, two lines show it.
        View::Parallax => 1,
        _ => 0,
    }
}

/// Rows a field's Phase view takes from its list of stars: its shared
/// error terms have a line of their own, and the distance on the anchors'
/// zero point (or why there is none) another.
pub const FIELD_EXTRA_ROWS: usize = 2;

/// Rows the Phase view gives to the refitted ephemeris (one) and the period
/// search (two), taken from its list of nights.
pub fn phase_extra_rows(r: &crate::ladder::pulsator::PhaseReport) -> usize {
    usize::from(r.star.ephemeris_update.is_some()) + 2 * usize::from(r.discovery.is_some())
}

/// The first row of a detail list of `len` rows shown `rows` at a time, for a
/// wanted first row `scroll`.
pub fn detail_offset(scroll: usize, rows: usize, len: usize) -> usize {
    scroll.min(len.saturating_sub(rows))
}

impl State {
    /// Rows in the current view's detail list (Phase windows, Chase nights), when there is one.
    pub fn detail_len(&self) -> Option<usize> {
        if self.view == View::Ladder {
            return match self.ladder_now()? {
                Ok(r) => Some(r.nodes.len() + r.supernovae.len()),
                Err(_) => None,
            };
        }
        match self.method_now()? {
            MethodBody::Phase(r) if self.view == View::Phase => {
                Some(r.windows.len() + phase_extra_rows(r))
            }
            MethodBody::Field(r) if self.view == View::Phase => {
                Some(r.stars.len() + FIELD_EXTRA_ROWS)
            }
            MethodBody::Chase(c) if self.view == View::Chase => {
                Some(c.nights.len() + crate::tui::views::chase_foot::extra_rows(c, self.size.0))
            }
            MethodBody::Parallax(p) if self.view == View::Parallax && !p.epochs.is_empty() => {
                Some(p.epochs.len())
            }
            _ => None,
        }
    }

    /// The largest useful detail scroll for the current view and terminal size.
    pub fn detail_max(&self) -> usize {
        let rows = detail_rows(self.view, self.size.1.saturating_sub(CHROME_ROWS));
        self.detail_len()
            .map(|n| n.saturating_sub(rows))
            .unwrap_or(0)
    }

    /// The scope keys are looked up in.
    pub fn scope(&self) -> Scope {
        match &self.overlay {
            Some(Overlay::Help { .. }) => Scope::Help,
            Some(Overlay::Sites { .. }) | Some(Overlay::Instruments { .. }) => Scope::Picker,
            Some(Overlay::Form(_)) | Some(Overlay::BudgetAsk(_)) => Scope::Form,
            Some(Overlay::Question(_)) => Scope::Question,
            None if self.filtering => Scope::Filter,
            None => Scope::Main,
        }
    }

    /// The selected target.
    pub fn selected(&self) -> Option<&Target> {
        self.order.get(self.sel).and_then(|i| self.targets.get(*i))
    }

    /// Whether the programme differs from the file.
    pub fn dirty(&self) -> bool {
        !same_targets(&self.targets, &self.saved)
    }

    /// The site.
    pub fn site(&self) -> &Site {
        &self.settings.site
    }

    /// The night table, when it is computed for the current site, night and
    /// limits: a table made for other settings is never shown (after a switch
    /// of site, the old site's windows are hidden until the new ones come).
    pub fn night_now(&self) -> Option<&NightData> {
        self.night.as_ref().filter(|n| {
            n.site == self.settings.site.name
                && n.date == self.date
                && n.limits == self.settings.limits
        })
    }

    /// Tonight's row of a target, when computed for the current settings.
    pub fn row(&self, name: &str) -> Option<&TargetRow> {
        self.night_now().and_then(|n| n.rows.get(name))
    }

    /// Rows a list view shows (terminal rows less chrome, title and header).
    pub fn list_rows(&self) -> usize {
        self.size.1.saturating_sub(CHROME_ROWS + 3) as usize
    }

    /// The method-report key for the current view and selection (Parallax, Phase and Chase).
    pub fn method_key(&self) -> Option<MethodKey> {
        if !matches!(self.view, View::Parallax | View::Phase | View::Chase) {
            return None;
        }
        let target = self.selected()?.clone();
        let field = if self.view == View::Phase {
            self.field_of(&target)
        } else {
            Vec::new()
        };
        // The whole programme for a calibrator's host distance, and for a
        // field's distance on the anchors' zero point (the ladder's).
        let programme =
            if (self.view == View::Chase && !target.host.is_empty()) || !field.is_empty() {
                self.targets.to_vec()
            } else {
                Vec::new()
            };
        Some(MethodKey {
            view: self.view,
            target,
            settings: self.settings.clone(),
            field,
            programme,
            file: self.programme_file(),
        })
    }

    /// The field a target is or belongs to, as its row and its stars (file
    /// order), when it links to one (`ladder::field::link`); else empty.
    pub fn field_of(&self, t: &Target) -> Vec<Target> {
        use crate::io::targets::Kind;
        let name = match t.kind {
            Kind::Field => t.name.as_str(),
            _ if !t.field.trim().is_empty() => t.field.trim(),
            _ => return Vec::new(),
        };
        let links = crate::ladder::field::link(&self.targets);
        match links.by_name(&self.targets, name) {
            Some(g) => std::iter::once(g.field)
                .chain(g.members.iter().copied())
                .map(|i| self.targets[i].clone())
                .collect(),
            None => Vec::new(),
        }
    }

    /// The budget key for the current programme, settings and hours asked
    /// (hours asked need the curves, for the shares of the leftover).
    pub fn budget_key(&self) -> BudgetKey {
        BudgetKey {
            targets: self.targets.clone(),
            settings: self.settings.clone(),
            asked: self.budget_ask.asked.clone(),
            curves: self.budget_ask.asked.is_some(),
            file: self.programme_file(),
            first: self.rows_in_sight(),
            first_shown: self.rows_on_screen(),
        }
    }

    /// Whether a row on the Roster's screen still waits for its figures and
    /// is not among `first` (the rows a running budget computes first).
    pub fn rows_in_sight_wait(&self, first: &[usize]) -> bool {
        let h = (self.size.1 as usize).max(1);
        let off = scroll_offset(self.sel, h.saturating_sub(CHROME_ROWS as usize + 2).max(1));
        self.order.iter().skip(off).take(h).any(|&i| {
            !first.contains(&i)
                && matches!(self.progress(&self.targets[i]), Progress::Pending { .. })
        })
    }

    /// How many of [`State::rows_in_sight`] are on screen (they come first).
    pub fn rows_on_screen(&self) -> usize {
        let h = (self.size.1 as usize).max(1);
        let shown = h.saturating_sub(CHROME_ROWS as usize + 2).max(1);
        let off = scroll_offset(self.sel, shown);
        (off + shown).min(self.order.len()) - off.min(self.order.len())
    }

    /// The Roster's rows (indices into `targets`) on screen, then the screens
    /// below and above: the budget's targets to compute first.
    pub fn rows_in_sight(&self) -> Vec<usize> {
        let h = (self.size.1 as usize).max(1);
        let off = scroll_offset(self.sel, h.saturating_sub(CHROME_ROWS as usize + 2).max(1));
        let n = self.order.len();
        let on = off.min(n)..(off + h).min(n);
        let below = on.end..(on.end + h).min(n);
        let above = off.saturating_sub(h)..off.min(n);
        on.chain(below)
            .chain(above)
            .map(|i| self.order[i])
            .collect()
    }

    /// The programme's file as messages name it: the file read at start,
    /// else where saves go.
    pub fn programme_file(&self) -> Option<std::path::PathBuf> {
        self.programme
            .source
            .clone()
            .or_else(|| Some(self.programme.save_path.clone()))
    }

    /// Whether a budget computed for `k` is the one the views show now: the
    /// same programme, settings and hours asked.
    pub fn budget_satisfies(&self, k: &BudgetKey) -> bool {
        self.budget_setting_is_current(k)
            && k.asked == self.budget_ask.asked
            && same_targets(&k.targets, &self.targets)
    }

    /// Whether a budget key is for the current settings (its programme aside).
    /// Compares in place: a redraw must not copy the programme.
    fn budget_setting_is_current(&self, k: &BudgetKey) -> bool {
        same_settings(&k.settings, &self.settings)
    }

    /// The distance ladder for the current programme and settings, when computed.
    pub fn ladder_now(&self) -> Option<&Result<Box<crate::ladder::chain::LadderReport>, String>> {
        let (k, r) = self.ladder.as_ref()?;
        (self.budget_setting_is_current(k) && same_targets(&k.targets, &self.targets)).then_some(r)
    }

    /// The budget for the current key, when computed.
    pub fn budget_now(&self) -> Option<&Result<Box<crate::plan::budget::Budget>, String>> {
        let (k, b) = self.budget.as_ref()?;
        self.budget_satisfies(k).then_some(b)
    }

    /// A target's progress towards its goal from the budget for the current site,
    /// date, instrument and limits (the Budget view's result, computed once).
    /// A budget made before an edit still answers for targets the edit left as
    /// they were, so the column does not blank out while it is recomputed.
    pub fn progress(&self, t: &Target) -> Progress {
        // A supernova already observed has no goal: it serves the ladder.
        if crate::plan::budget::observed_row(t).is_some() {
            return Progress::NoGoal;
        }
        // A star of a field shows its field's progress (the field is one unit).
        if !t.field.is_empty()
            && let Some((k, Ok(b))) = self.budget.as_ref()
            && self.budget_setting_is_current(k)
            && key_holds(k, &self.targets, t)
            && let Some(r) = b.rows.iter().find(|r| r.members.contains(&t.name))
        {
            return Progress::Predicted {
                achievable_pct: r.achievable_pct,
                goal_pct: r.goal_pct,
                reached: r.verdict == crate::ladder::Verdict::Reachable,
                verdict: r.verdict.clone(),
            };
        }
        // The goal the budget uses: the target's own, else the programme's,
        // else its method's default (a supernova without goal_pct has one).
        let Some(goal_pct) = self.settings.goal_for(t) else {
            return Progress::NoGoal;
        };
        let Some((k, b)) = self.budget.as_ref() else {
            return self.partial_progress(t, goal_pct);
        };
        let same = self.budget_setting_is_current(k) && key_holds(k, &self.targets, t);
        if !same {
            return self.partial_progress(t, goal_pct);
        }
        let b = match b {
            Ok(b) => b,
            Err(e) => {
                return Progress::Unavailable {
                    goal_pct,
                    why: e.clone(),
                };
            }
        };
        if let Some(r) = b.rows.iter().find(|r| r.target == t.name) {
            return Progress::Predicted {
                achievable_pct: r.achievable_pct,
                goal_pct: r.goal_pct,
                reached: r.verdict == crate::ladder::Verdict::Reachable,
                verdict: r.verdict.clone(),
            };
        }
        match b.skipped.iter().find(|x| x.0 == t.name) {
            Some((_, why)) => Progress::Unavailable {
                goal_pct,
                why: why.clone(),
            },
            None => self.partial_progress(t, goal_pct),
        }
    }

    /// A target's progress from the figures of a budget being computed
    /// ([`State::budget_partial`]) for the current settings; pending without.
    fn partial_progress(&self, t: &Target, goal_pct: f64) -> Progress {
        let figure = self
            .budget_partial
            .as_ref()
            .filter(|(st, _)| same_settings(st, &self.settings))
            .and_then(|(_, m)| m.get(&t.name))
            .and_then(|v| v.iter().find(|(mt, _)| mt == t))
            .map(|x| &x.1);
        match figure {
            Some(Ok((achievable_pct, verdict))) => Progress::Predicted {
                achievable_pct: *achievable_pct,
                goal_pct,
                reached: *verdict == crate::ladder::Verdict::Reachable,
                verdict: verdict.clone(),
            },
            Some(Err(why)) => Progress::Unavailable {
                goal_pct,
                why: why.clone(),
            },
            None => Progress::Pending { goal_pct },
        }
    }

    /// The report for the current view and selection, when computed.
    pub fn method_now(&self) -> Option<&MethodBody> {
        let m = self.method.as_ref()?;
        let k = self.method_key()?;
        (m.key == k).then_some(&m.body)
    }

    /// The season key for the current site, date, limits and step.
    pub fn season_key(&self) -> SeasonKey {
        SeasonKey {
            site: self.settings.site.name.clone(),
            from: self.date,
            step_days: self.season_step_days,
            nights: SEASON_NIGHTS,
            limits: self.settings.limits,
        }
    }

    /// First and last night of the Season view's strip (the span the plan export schedules).
    pub fn season_span(&self) -> (NaiveDate, NaiveDate) {
        let k = self.season_key();
        let last = (k.nights.max(1) - 1) * k.step_days;
        (k.from, k.from + chrono::Days::new(last as u64))
    }

    /// Rebuild `order` from the targets, filter and sort; keep the selected target selected.
    pub fn reorder(&mut self) {
        let keep = self.selected().map(|t| t.name.clone());
        self.reorder_keeping(keep);
    }

    /// Rebuild `order`; select the target named `keep` when it is still listed.
    pub fn reorder_keeping(&mut self, keep: Option<String>) {
        let f = self.filter.to_lowercase();
        let idx: Vec<usize> = (0..self.targets.len())
            .filter(|i| {
                let t = &self.targets[*i];
                f.is_empty()
                    || t.name.to_lowercase().contains(&f)
                    || t.kind.as_str().contains(&f)
                    || t.notes.to_lowercase().contains(&f)
            })
            .collect();
        let key = |i: &usize| -> (f64, String) {
            let t = &self.targets[*i];
            let r = self.row(&t.name);
            let big = f64::INFINITY;
            let v = match self.sort {
                SortKey::File => *i as f64,
                SortKey::Name => 0.0,
                SortKey::Kind => t.kind as u8 as f64,
                SortKey::Window => r
                    .and_then(|r| r.night.main_window())
                    .map(|w| w.0.jd_utc())
                    .unwrap_or(big),
                SortKey::Hours => r.map(|r| -r.night.observable_hours).unwrap_or(big),
                SortKey::Airmass => r.and_then(|r| r.night.min_airmass).unwrap_or(big),
                SortKey::Moon => r
                    .and_then(|r| r.moon_separation_deg)
                    .map(|m| -m)
                    .unwrap_or(big),
                SortKey::Priority => -t.priority,
            };
            (v, t.name.to_lowercase())
        };
        // Each row's key once (not twice a comparison: at 10,000 targets
        // that was 280,000 lookups and copies a key stroke), then the same
        // stable sort on them.
        let mut keyed: Vec<((f64, String), usize)> = idx.iter().map(|i| (key(i), *i)).collect();
        keyed.sort_by(|(ka, _), (kb, _)| {
            ka.0.partial_cmp(&kb.0)
                .unwrap_or(std::cmp::Ordering::Equal)
                .then_with(|| ka.1.cmp(&kb.1))
        });
        let mut idx: Vec<usize> = keyed.into_iter().map(|(_, i)| i).collect();
        if self.sort_rev {
            idx.reverse();
        }
        self.order = idx;
        self.sel = keep
            .and_then(|n| self.order.iter().position(|i| self.targets[*i].name == n))
            .unwrap_or(0)
            .min(self.order.len().saturating_sub(1));
    }
}
