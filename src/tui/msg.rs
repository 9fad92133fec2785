//! Everything that can happen to the UI ([`Msg`]) and the side effects
//! `update` asks for ([`Effect`]). The actions keys are bound to live with the
//! key table (`crate::tui::keymap::Action`); the data results carry live with
//! the state (`crate::tui::state`).

use crate::astro::night::Limits;
use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::io::targets::Target;
// Re-exported where it used to live, for code that names it `msg::Action`.
pub use crate::tui::keymap::Action;
use crate::tui::state::{
    BudgetKey, MethodKey, MethodResult, NightData, NightsJob, SeasonKey, SeasonSky,
};
use crossterm::event::KeyEvent;
use std::path::PathBuf;
use std::sync::Arc;

/// A computed season strip for some targets.
#[derive(Debug, Clone)]
pub struct SeasonRows {
    /// What the rows are for.
    pub key: SeasonKey,
    /// The nights of the strip (shared with later jobs for the same key).
    pub nights: Arc<SeasonSky>,
    /// Observable hours per night, by target name.
    pub rows: Vec<(String, Vec<f64>)>,
}

/// Everything that can happen.
#[derive(Debug, Clone)]
pub enum Msg {
    /// A key was pressed.
    Key(KeyEvent),
    /// A bound action (what a key maps to; also sent directly by tests).
    Act(Action),
    /// The clock moved on.
    Tick(Instant),
    /// The terminal has a new size (columns, rows).
    Resize(u16, u16),
    /// The night's table was computed.
    NightReady(Box<NightData>),
    /// The night could not be computed.
    NightFailed(String),
    /// Season rows were computed.
    SeasonReady(Box<SeasonRows>),
    /// The season could not be computed.
    SeasonFailed(SeasonKey, String),
    /// A save finished: what was written, or the error.
    Saved(Result<Saved, String>),
    /// A save found the file changed by another session, and both changed
    /// these targets: nothing was written.
    SaveConflict(Vec<String>),
    /// A budget was computed (or failed).
    BudgetReady(
        Box<BudgetKey>,
        Result<Box<crate::plan::budget::Budget>, String>,
    ),
    /// Some targets' figures from a budget still being computed (for the
    /// settings given), shown until the whole budget arrives.
    BudgetPartial(
        Arc<crate::programme::Settings>,
        Vec<(Target, crate::tui::state::PartialFigure)>,
    ),
    /// The distance ladder was computed (or why it does not close).
    LadderReady(
        Box<BudgetKey>,
        Result<Box<crate::ladder::chain::LadderReport>, String>,
    ),
    /// An export finished: the files written, or the error.
    Exported(Result<Vec<PathBuf>, String>),
    /// The budget's files were written (each named in full), or why not.
    BudgetExported(Result<Vec<PathBuf>, String>),
    /// A distance-method report (Phase, Chase) was computed.
    MethodReady(Box<MethodResult>),
    /// The unsaved-edits file was written or removed (or the error).
    RecoveryKept(Result<(), String>),
    /// The Next view's queue was computed (after a mark or re-plan, if any).
    NextReady(Box<crate::tui::state::NextData>),
}

/// What the observer typed when marking a visit done, as one line
/// (`crate::tui::update::done_typed`).
#[derive(Debug, Clone, PartialEq)]
pub struct DoneTyped {
    /// Seeing FWHM, arcseconds.
    pub seeing_arcsec: Option<f64>,
    /// Comment.
    pub comment: Option<String>,
    /// Measured signal-to-noise (`rung plan --snr`'s forms).
    pub snr_measured: Vec<(Option<String>, f64)>,
}

impl DoneTyped {
    /// The mark it makes of a visit observed from `observed`.
    pub fn mark(&self, observed: Instant) -> crate::plan::schedule::DoneMark {
        crate::plan::schedule::DoneMark {
            observed,
            seeing_arcsec: self.seeing_arcsec,
            comment: self.comment.clone(),
            snr_measured: self.snr_measured.clone(),
        }
    }
}

/// What the Next view asks of its plan before ranking.
#[derive(Debug, Clone, PartialEq)]
pub enum NextOp {
    /// Only rank.
    Refresh,
    /// Mark a visit done now, as typed (seeing, measured signal-to-noise,
    /// comment).
    Done {
        /// Visit id.
        id: String,
        /// What the observer typed.
        typed: DoneTyped,
    },
    /// Mark a visit lost.
    Lost(String),
    /// Mark the rest of tonight lost.
    LoseNight,
    /// Re-plan from now.
    Replan,
}

/// A job for the Next view: apply `op` to the plan file (logged, then saved)
/// and rank the queue at `now`.
#[derive(Debug, Clone)]
pub struct NextJob {
    /// The programme's settings.
    pub settings: Arc<crate::programme::Settings>,
    /// The targets.
    pub targets: Vec<Target>,
    /// The plan file, if any.
    pub plan_file: Option<PathBuf>,
    /// The clock.
    pub now: Instant,
    /// What to do first.
    pub op: NextOp,
}

/// A job for the night table: the night at a site and every target's visibility in it.
#[derive(Debug, Clone)]
pub struct NightJob {
    /// Site.
    pub site: Site,
    /// Local date of the evening.
    pub date: chrono::NaiveDate,
    /// Window limits.
    pub limits: Limits,
    /// Targets to compute (the state's programme, shared).
    pub targets: Arc<Vec<Target>>,
    /// Generation counter; stale results are dropped.
    pub generation: u64,
}

/// A job for the season strip of some targets.
#[derive(Debug, Clone)]
pub struct SeasonJob {
    /// What the strip is for.
    pub key: SeasonKey,
    /// Site.
    pub site: Site,
    /// Nights already computed for this key, if any.
    pub nights: Option<Arc<SeasonSky>>,
    /// Targets to compute.
    pub targets: Vec<Target>,
}

/// A job for the plan export: schedule a span with the library's scheduler and
/// write the plan (JSON, CSV, iCalendar) and one night's sheet into `dir`.
#[derive(Debug, Clone)]
pub struct PlanJob {
    /// The programme's settings: site, range, limits, instrument, methods.
    pub settings: std::sync::Arc<crate::programme::Settings>,
    /// The programme.
    pub targets: Vec<Target>,
    /// The programme file, as the plan file records it.
    pub targets_file: String,
    /// Telescope hours per night.
    pub hours_per_night: f64,
    /// The night whose sheet is written.
    pub sheet_night: chrono::NaiveDate,
    /// The iCalendar DTSTAMP.
    pub stamp: Instant,
    /// Folder the files go to.
    pub dir: PathBuf,
}

/// A save of the programme: written as `text` when the file is still the one
/// this session last read or wrote (`expect`); else merged by target with what
/// another session saved there ([`crate::io::merge::merge3`] of `base`, the
/// file, `mine`), and refused when both changed a target, unless `force`.
#[derive(Debug, Clone)]
pub struct SaveJob {
    /// Where the programme goes.
    pub path: PathBuf,
    /// CSV text of `mine`.
    pub text: String,
    /// A copy of the file as it was loaded, written once before the first save.
    pub backup: Option<(PathBuf, Vec<u8>)>,
    /// Fingerprint of the file as this session last read or wrote it (`None`: no file then).
    pub expect: Option<u64>,
    /// Write even over another session's changes (the user chose to): the
    /// file as it is then goes to the backup first.
    pub force: bool,
    /// The programme as this session last read or wrote it.
    pub base: Vec<Target>,
    /// The programme as this session has it.
    pub mine: Vec<Target>,
    /// The settings file of the programme read at start and the one beside
    /// `path` (`programme::settings_path`), when they differ: a programme
    /// saved to a new file takes its settings along (range, site,
    /// instrument, limits, goal), written only where none is yet.
    pub settings: Option<(PathBuf, PathBuf)>,
}

/// What a save wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct Saved {
    /// The file.
    pub path: PathBuf,
    /// Fingerprint of the bytes written.
    pub disk: Option<u64>,
    /// When another session had saved meanwhile: the merge that was written.
    pub merged: Option<crate::io::merge::Merged>,
}

/// What to do with the unsaved-edits file.
#[derive(Debug, Clone, PartialEq)]
pub enum RecoveryOp {
    /// Write these CSV rows to it (atomically).
    Keep(String),
    /// Remove it (nothing is unsaved, or the user dropped the edits).
    Remove,
    /// Move it to `<file>.old` (the user declined to restore it).
    SetAside,
}

/// Side effects `update` asks the runner to perform.
#[derive(Debug, Clone)]
pub enum Effect {
    /// Compute the night table (in the background).
    Night(Box<NightJob>),
    /// Compute season rows (in the background).
    Season(Box<SeasonJob>),
    /// Compute the programme's budget (in the background).
    Budget(Box<BudgetKey>),
    /// Build the nights of the programme's range ahead, into the library's
    /// shared cache (in the background, beside the night table), so the
    /// budget that follows finds them built.
    Nights(Box<NightsJob>),
    /// Compute the programme's distance ladder (in the background).
    Ladder(Box<BudgetKey>),
    /// Write export files atomically (path, contents).
    Export(Vec<(PathBuf, String)>),
    /// Compute the budget with every target's curve (kept predictions are
    /// reused) and write its files (CSV, Markdown, LaTeX, the figure, the
    /// justification) into the folder, named after the stem.
    BudgetExport(Box<(BudgetKey, PathBuf, String)>),
    /// Build a schedule and write the plan files (in the background).
    ExportPlan(Box<PlanJob>),
    /// Compute a distance-method report for one target (in the background).
    Method(Box<MethodKey>),
    /// Write the programme atomically (see [`SaveJob`]).
    Save(Box<SaveJob>),
    /// Do something with the unsaved-edits (recovery) file.
    Recovery {
        /// The recovery file.
        path: PathBuf,
        /// What to do with it.
        op: RecoveryOp,
    },
    /// Mark or re-plan the Next view's plan and rank its queue (inline, in order).
    Next(Box<NextJob>),
    /// Several effects.
    Batch(Vec<Effect>),
}

impl Effect {
    /// Join two optional effects.
    pub fn join(a: Option<Effect>, b: Option<Effect>) -> Option<Effect> {
        match (a, b) {
            (None, x) | (x, None) => x,
            (Some(a), Some(b)) => Some(Effect::Batch(vec![a, b])),
        }
    }
}
