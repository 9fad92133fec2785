//! The observing log: what happened at the telescope, one CSV row per event
//! (`<plan stem>.log.csv` beside the plan file), only ever appended to.
//!
//! Every mark goes to the log first and then to the plan: the row is written
//! with one `write` on a file opened for appending and flushed to the disk
//! (`fsync`) before the plan file is saved atomically (`io::atomic`) with the
//! row's sequence number (`PlanFile::log_seq`). A process killed between the
//! two leaves the row in the log; [`catch_up`] applies it when the plan is
//! next opened, so nothing marked is lost. A process killed while writing the
//! row can leave a torn last line (no line end): it is ignored on reading,
//! and the next append starts a new line after it.
//!
//! The plan can be rebuilt from the log alone ([`rebuild`]): its first row
//! carries the plan's settings, the marks carry the visits as they were, and
//! a re-plan row its clock; replaying them through the deterministic
//! scheduler gives the plan again.
//!
//! Columns: `seq` (1, 2, …), `logged_utc`, `event` (`plan`, `done`, `lost`,
//! `lost_night`, `replan`), `visit_id`, `target`, `night`, `observed_utc`
//! (a done visit's time, a re-plan's clock), `seeing_arcsec`, `comment`,
//! `data` (JSON: the plan's settings for `plan`, the visit for `done` and
//! `lost`, the hours for `replan`).

use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::error::{Location, Result, RungError};
use crate::io::targets::Target;
use crate::plan::file::PlanFile;
use crate::plan::schedule::{Schedule, Status, Visit};
use crate::programme::Settings;
use chrono::NaiveDate;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The header row of every observing log.
pub const HEADER: [&str; 10] = [
    "seq",
    "logged_utc",
    "event",
    "visit_id",
    "target",
    "night",
    "observed_utc",
    "seeing_arcsec",
    "comment",
    "data",
];

/// What happened.
#[derive(Debug, Clone, PartialEq)]
pub enum Event {
    /// The plan was made (its settings, without visits).
    Plan(Box<PlanFile>),
    /// A visit was observed (the visit as marked: time, seeing, comment).
    Done(Box<Visit>),
    /// A visit was lost.
    Lost(Box<Visit>),
    /// A night (or what was left of it) was lost.
    LostNight(NaiveDate),
    /// Everything not done was re-planned at this clock, with these hours a night.
    Replan {
        /// The clock of the re-plan.
        at: Instant,
        /// Hours a night.
        hours_per_night: f64,
    },
}

/// One row of the log.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    /// Sequence number, 1 for the first row.
    pub seq: u64,
    /// When it was written (UTC).
    pub logged: Instant,
    /// What happened.
    pub event: Event,
    /// The line of the log it was read from (`None` for one just written).
    pub line: Option<usize>,
}

/// The log of a plan file: `plan.json` → `plan.log.csv`, beside it.
pub fn log_path(plan: &Path) -> PathBuf {
    let stem = plan
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "plan".into());
    plan.with_file_name(format!("{stem}.log.csv"))
}

fn row(e: &Entry) -> Vec<String> {
    let (kind, id, target, night, observed, seeing, comment, data) = match &e.event {
        Event::Plan(p) => {
            let mut p = (**p).clone();
            p.visits.clear();
            (
                "plan",
                String::new(),
                String::new(),
                String::new(),
                String::new(),
                None,
                String::new(),
                serde_json::to_string(&p).unwrap_or_default(),
            )
        }
        Event::Done(v) | Event::Lost(v) => (
            if matches!(e.event, Event::Done(_)) {
                "done"
            } else {
                "lost"
            },
            v.id.clone(),
            v.target.clone(),
            v.night.to_string(),
            v.observed.map(|t| t.iso()).unwrap_or_default(),
            v.seeing_arcsec,
            v.comment
                .clone()
                .unwrap_or_default()
                .replace(['\n', '\r'], " "),
            serde_json::to_string(v).unwrap_or_default(),
        ),
        Event::LostNight(d) => (
            "lost_night",
            String::new(),
            String::new(),
            d.to_string(),
            String::new(),
            None,
            String::new(),
            String::new(),
        ),
        Event::Replan {
            at,
            hours_per_night,
        } => (
            "replan",
            String::new(),
            String::new(),
            String::new(),
            at.iso(),
            None,
            String::new(),
            serde_json::json!({ "hours_per_night": hours_per_night }).to_string(),
        ),
    };
    vec![
        e.seq.to_string(),
        e.logged.iso(),
        kind.into(),
        id,
        target,
        night,
        observed,
        crate::output::csv_num(seeing, 2),
        comment,
        data,
    ]
}

/// Read a log: its rows in order. A torn last line (no line end: a write
/// cut by a kill) is left out; any other row that cannot be read is an
/// error naming the file, line and field. A missing file is an empty log.
pub fn read(path: &Path) -> Result<Vec<Entry>> {
    let bytes = match std::fs::read(path) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(vec![]),
        Err(e) => return Err(RungError::io(path, e)),
    };
    // Only whole lines count.
    let whole = match bytes.iter().rposition(|b| *b == b'\n') {
        Some(k) => &bytes[..=k],
        None => &bytes[..0],
    };
    let mut out = Vec::new();
    let mut header = true;
    // The plan's nights, from its settings row: what a visit row is checked against.
    let mut range: Option<(NaiveDate, NaiveDate)> = None;
    let at = |line: usize, field: &str, msg: String| RungError::InFile {
        loc: Location {
            file: Some(path.to_path_buf()),
            line: Some(line),
            field: Some(field.into()),
        },
        msg,
    };
    // One row a line (rung writes no line break inside a field). A row cut
    // short by a kill (fewer fields, or a quote left open) is skipped.
    for (k, text) in whole.split(|b| *b == b'\n').enumerate() {
        if text.iter().all(|b| b.is_ascii_whitespace()) {
            continue;
        }
        let mut one = text.to_vec();
        one.push(b'\n');
        let mut recs = crate::io::csv_text::Records::new(std::io::BufReader::new(&one[..]));
        let mut rec = crate::io::csv_text::Record::default();
        let ev = recs
            .next_into(&mut rec)
            .map_err(|e| RungError::io(path, e))?;
        if !matches!(ev, Some(crate::io::csv_text::Event::Record)) {
            continue;
        }
        rec.line = k + 1;
        let f = |i: usize| {
            if i < rec.len() {
                rec.value(i).unwrap_or("").to_string()
            } else {
                String::new()
            }
        };
        if header {
            header = false;
            if f(0) != "seq" {
                return Err(at(
                    rec.line,
                    "seq",
                    "not an observing log (its header must start with 'seq')".into(),
                ));
            }
            continue;
        }
        if rec.len() != HEADER.len() {
            continue;
        }
        let line = rec.line;
        let seq: u64 = f(0)
            .parse()
            .map_err(|_| at(line, "seq", format!("'{}' is not a sequence number", f(0))))?;
        let logged = crate::astro::time::parse_instant(&f(1))
            .map_err(|e| at(line, "logged_utc", e.to_string()))?;
        let json = |field: &str| -> Result<serde_json::Value> {
            serde_json::from_str(&f(9)).map_err(|e| at(line, field, format!("data: {e}")))
        };
        let event = match f(2).as_str() {
            "plan" => {
                let head: PlanFile = serde_json::from_value(json("data")?)
                    .map_err(|e| at(line, "data", format!("plan settings: {e}")))?;
                if let Some((field, why)) = crate::plan::file::check_settings(&head) {
                    return Err(at(line, "data", format!("{field}: {why}")));
                }
                range = Some((head.from, head.to));
                Event::Plan(Box::new(head))
            }
            k @ ("done" | "lost") => {
                let v: Visit = serde_json::from_value(json("data")?)
                    .map_err(|e| at(line, "data", format!("visit: {e}")))?;
                // Held to a plan file's bounds, so that a bad row is named
                // here and never saved into the plan by a catch-up.
                if let Some((field, why)) = crate::plan::file::check_visit(
                    &v,
                    range.map_or(v.night, |r| r.0),
                    range.map_or(v.night, |r| r.1),
                ) {
                    return Err(at(line, "data", format!("{field}: {why}")));
                }
                if k == "done" {
                    Event::Done(Box::new(v))
                } else {
                    Event::Lost(Box::new(v))
                }
            }
            "lost_night" => {
                let night = crate::astro::time::parse_date(&f(5))
                    .map_err(|e| at(line, "night", e.to_string()))?;
                if let Some(why) =
                    range.and_then(|(a, b)| crate::plan::file::check_night(night, a, b))
                {
                    return Err(at(line, "night", why));
                }
                Event::LostNight(night)
            }
            "replan" => {
                let hours_per_night = json("data")?["hours_per_night"]
                    .as_f64()
                    .ok_or_else(|| at(line, "data", "no hours_per_night".into()))?;
                if let Some(why) = crate::bounds::hours_per_night_why_not(hours_per_night) {
                    return Err(at(line, "data", format!("hours_per_night: {why}")));
                }
                Event::Replan {
                    at: crate::astro::time::parse_instant(&f(6))
                        .map_err(|e| at(line, "observed_utc", e.to_string()))?,
                    hours_per_night,
                }
            }
            other => {
                return Err(at(
                    line,
                    "event",
                    format!("'{other}' is not a log event (plan, done, lost, lost_night, replan)"),
                ));
            }
        };
        out.push(Entry {
            seq,
            logged,
            event,
            line: Some(line),
        });
    }
    Ok(out)
}

/// Append one event (the next sequence number after the log's last and the
/// plan's), flushed to the disk before returning. Returns the entry.
pub fn append(path: &Path, plan: &PlanFile, event: Event, now: Instant) -> Result<Entry> {
    let last = read(path)?.last().map_or(0, |e| e.seq);
    let entry = Entry {
        seq: last.max(plan.log_seq) + 1,
        logged: now,
        event,
        line: None,
    };
    let io = |e| RungError::io(path, e);
    let fresh = !path.exists();
    let mut f = std::fs::OpenOptions::new()
        .append(true)
        .create(true)
        .open(path)
        .map_err(io)?;
    let mut text = String::new();
    if fresh {
        text.push_str(&crate::output::csv_record(&HEADER));
    } else {
        // After a torn last line, start a new one.
        let bytes = std::fs::read(path).map_err(io)?;
        if bytes.last().is_some_and(|b| *b != b'\n') {
            text.push('\n');
        }
    }
    text.push_str(&crate::output::csv_record(&row(&entry)));
    f.write_all(text.as_bytes()).map_err(io)?;
    f.sync_all().map_err(io)?;
    if fresh {
        let dir = path
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        if let Ok(d) = std::fs::File::open(dir) {
            let _ = d.sync_all();
        }
    }
    Ok(entry)
}

/// Re-plans a plan at a clock with some hours a night (for [`rebuild`]).
type Replanner<'a> = dyn Fn(&mut PlanFile, Instant, f64) -> Result<()> + 'a;

/// Apply one event to a plan (a re-plan only when `replan` is given: it
/// needs the settings and targets).
fn apply(p: &mut PlanFile, e: &Entry, replan: Option<&Replanner>) -> Result<()> {
    match &e.event {
        Event::Plan(h) => {
            let visits = std::mem::take(&mut p.visits);
            *p = (**h).clone();
            p.visits = visits;
        }
        Event::Done(v) | Event::Lost(v) => match p.visits.iter_mut().find(|x| x.id == v.id) {
            Some(x) => *x = (**v).clone(),
            None => {
                p.visits.push((**v).clone());
                p.visits.sort_by(|a, b| {
                    a.start
                        .partial_cmp(&b.start)
                        .unwrap_or(std::cmp::Ordering::Equal)
                });
            }
        },
        Event::LostNight(d) => p.lose_night(*d),
        Event::Replan {
            at,
            hours_per_night,
        } => {
            if let Some(f) = replan {
                f(p, *at, *hours_per_night)?;
            }
        }
    }
    p.log_seq = p.log_seq.max(e.seq);
    Ok(())
}

/// Apply the log's events the plan does not hold yet (a mark written to the
/// log by a process killed before it saved the plan). Returns how many.
pub fn catch_up(p: &mut PlanFile, log: &Path) -> Result<usize> {
    let mut n = 0;
    let held = p.log_seq;
    for e in read(log)?.iter().filter(|e| e.seq > held) {
        apply(p, e, None)?;
        n += 1;
    }
    Ok(n)
}

/// Rebuild a plan from its log alone: the settings of its `plan` row, the
/// plan made again by the scheduler, then every mark and re-plan replayed.
/// Returns the plan and a note for each mark whose visit the plan made
/// again does not hold (the targets file or the scheduler changed since it
/// was logged): such a visit is kept as logged, beside the plan's own.
pub fn rebuild(
    log: &Path,
    settings: &Settings,
    targets: &[Target],
) -> Result<(PlanFile, Vec<String>)> {
    let entries = read(log)?;
    let Some(Event::Plan(head)) = entries.first().map(|e| &e.event) else {
        return Err(RungError::invalid(
            "observing log",
            format!("{} does not start with the plan's settings", log.display()),
        ));
    };
    let mut p = (**head).clone();
    let mut req = crate::plan::schedule::Request::programme(settings, targets, p.hours_per_night);
    if let Some(h) = p.horizon_to {
        req.horizon_to = h;
    }
    p.visits = crate::plan::schedule::schedule(&req)?.visits;
    let replan = |p: &mut PlanFile, at: Instant, hours: f64| -> Result<()> {
        p.replan(settings, targets, at, Some(hours), None)
            .map(|_| ())
    };
    let mut notes = Vec::new();
    for e in &entries {
        if let Event::Done(v) | Event::Lost(v) = &e.event
            && p.visits.iter().all(|x| x.id != v.id)
        {
            notes.push(format!(
                "{}{}: visit {} ({}) is not in the plan made again from the log's settings (the targets file or rung's scheduler changed since it was logged): kept as logged, beside the plan's own visits of {}; a --replan places the rest around it",
                log.display(),
                e.line.map(|l| format!(", line {l}")).unwrap_or_default(),
                v.id,
                v.status.as_str(),
                v.target
            ));
        }
        apply(&mut p, e, Some(&replan))?;
    }
    Ok((p, notes))
}

/// Save the plan atomically (its `log_seq` says which log rows it holds).
pub fn save_plan(plan_path: &Path, p: &PlanFile) -> Result<()> {
    crate::io::atomic::write_atomic(plan_path, p.to_json().as_bytes())
}

/// Start a plan's log (its settings row) when it has none.
pub fn start(plan_path: &Path, p: &mut PlanFile, now: Instant) -> Result<()> {
    let log = log_path(plan_path);
    if read(&log)?.is_empty() {
        let e = append(&log, p, Event::Plan(Box::new(p.clone())), now)?;
        p.log_seq = e.seq;
    }
    Ok(())
}

pub use crate::plan::schedule::DoneMark;

/// Mark a visit done as `mark` says ([`Visit::mark_done`]: its airmass and
/// Sun caution become those of the visit as observed, the target's place
/// from `targets`), then log the mark and save the plan. Returns the note
/// [`Visit::mark_done`] gives when the observed time looks like a slip (or
/// the target's place is unknown).
pub fn mark_done(
    plan_path: &Path,
    p: &mut PlanFile,
    id: &str,
    mark: &DoneMark,
    site: &Site,
    targets: &[Target],
    now: Instant,
) -> Result<Option<String>> {
    let (v, note) = p.marked_done(id, mark, site, targets)?;
    record(plan_path, p, Event::Done(Box::new(v)), now)?;
    Ok(note)
}

/// Mark a visit lost: logged, then the plan saved.
pub fn mark_lost(plan_path: &Path, p: &mut PlanFile, id: &str, now: Instant) -> Result<()> {
    let mut v = p.visit(id)?.clone();
    v.status = Status::Lost;
    record(plan_path, p, Event::Lost(Box::new(v)), now)
}

/// Mark a night lost (what is left of it: its planned visits become lost and
/// a re-plan places nothing more on it): logged, then the plan saved.
pub fn lose_night(
    plan_path: &Path,
    p: &mut PlanFile,
    night: NaiveDate,
    now: Instant,
) -> Result<()> {
    if let Some(why) = crate::plan::file::check_night(night, p.from, p.to) {
        return Err(RungError::invalid("night", why));
    }
    record(plan_path, p, Event::LostNight(night), now)
}

/// Re-plan at `at` (`PlanFile::replan`): logged at `now`, then the plan saved.
pub fn replan(
    plan_path: &Path,
    p: &mut PlanFile,
    settings: &Settings,
    targets: &[Target],
    at: Instant,
    now: Instant,
) -> Result<Schedule> {
    let mut copy = p.clone();
    let s = copy.replan(settings, targets, at, None, None)?;
    start(plan_path, p, now)?;
    let e = append(
        &log_path(plan_path),
        p,
        Event::Replan {
            at,
            hours_per_night: copy.hours_per_night,
        },
        now,
    )?;
    copy.log_seq = e.seq;
    *p = copy;
    save_plan(plan_path, p)?;
    Ok(s)
}

fn record(plan_path: &Path, p: &mut PlanFile, event: Event, now: Instant) -> Result<()> {
    start(plan_path, p, now)?;
    let e = append(&log_path(plan_path), p, event, now)?;
    apply(p, &e, None)?;
    save_plan(plan_path, p)
}
