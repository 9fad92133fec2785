//! Plan files: a schedule saved as JSON so a season can be re-planned after
//! nights are lost to weather. Saved atomically; a broken or foreign plan file
//! is reported with where it is broken and is never overwritten.

use crate::astro::night::Limits;
use crate::error::{Location, Result, RungError};
use crate::io::targets::Target;
use crate::plan::schedule::{Status, Visit, fingerprint};
use crate::programme::Settings;
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::BTreeSet;
use std::path::Path;

/// The format tag every plan file carries.
pub const FORMAT: &str = "rung-plan/1";

/// A saved plan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlanFile {
    /// Always [`FORMAT`].
    pub format: String,
    /// The site as given to `--site` (catalogue name or inline coordinates).
    pub site: String,
    /// The targets file the plan was made from, as given.
    pub targets_file: String,
    /// Fingerprint of the targets list ([`fingerprint`]).
    pub targets_fingerprint: String,
    /// First night.
    pub from: NaiveDate,
    /// Last night.
    pub to: NaiveDate,
    /// Hours per night.
    pub hours_per_night: f64,
    /// Minimum altitude, degrees.
    pub min_alt_deg: f64,
    /// Sun limit, degrees.
    pub sun_alt_deg: f64,
    /// The instrument the exposures are for (absent in plans written before it was kept).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub instrument: Option<String>,
    /// Nights lost to weather or faults.
    #[serde(default)]
    pub lost_nights: BTreeSet<NaiveDate>,
    /// The visits.
    pub visits: Vec<Visit>,
    /// The last night the methods planned for (absent in older plan files: `to`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub horizon_to: Option<NaiveDate>,
    /// How many events of the plan's observing log (`plan::log`) this file
    /// holds; a later event found in the log is applied when the plan is
    /// opened (absent in older plan files: 0).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub log_seq: u64,
}

fn is_zero(n: &u64) -> bool {
    *n == 0
}

impl PlanFile {
    /// A new plan of `targets` (read from `targets_file`) with the
    /// programme's settings: its site, range, limits and instrument.
    pub fn new(
        settings: &Settings,
        targets: &[Target],
        targets_file: String,
        hours_per_night: f64,
        visits: Vec<Visit>,
    ) -> Self {
        PlanFile {
            format: FORMAT.into(),
            site: settings.site_spec.clone(),
            targets_file,
            targets_fingerprint: fingerprint(targets),
            from: settings.from,
            to: settings.to,
            hours_per_night,
            min_alt_deg: settings.limits.min_alt_deg,
            sun_alt_deg: settings.limits.sun_alt_deg,
            instrument: Some(settings.instrument().name.clone()),
            lost_nights: BTreeSet::new(),
            visits,
            horizon_to: None,
            log_seq: 0,
        }
    }

    /// The line a night sheet of this plan starts with.
    pub fn sheet_header(&self) -> String {
        format!(
            "Plan {} to {}, {:.1} h per night, window above {:.0}° with the Sun below {:.0}°.",
            self.from, self.to, self.hours_per_night, self.min_alt_deg, self.sun_alt_deg
        )
    }

    /// The window limits of the plan.
    pub fn limits(&self) -> Result<Limits> {
        Limits::new(self.min_alt_deg, self.sun_alt_deg)
    }

    /// Check that the plan belongs to `targets`.
    pub fn check_targets(&self, targets: &[Target], path: &Path) -> Result<()> {
        let fp = fingerprint(targets);
        if fp != self.targets_fingerprint {
            return Err(RungError::InFile {
                loc: Location {
                    file: Some(path.to_path_buf()),
                    line: None,
                    field: Some("targets_fingerprint".into()),
                },
                msg: format!(
                    "this plan was made for another targets list ({}, fingerprint {}); the list given has fingerprint {fp}. Nothing was changed",
                    self.targets_file, self.targets_fingerprint
                ),
            });
        }
        Ok(())
    }

    /// The visit with id `id`; an unknown id is an error naming it.
    pub fn visit(&self, id: &str) -> Result<&Visit> {
        let i = self.visit_index(id)?;
        Ok(&self.visits[i])
    }

    /// The visit `id` marked done as `mark` says ([`Visit::mark_done`]),
    /// as a copy, with the note that gives; the plan itself unchanged.
    /// Refused when the visit as observed falls on a night outside the
    /// plan's (an observed time a year off, a slip of the keyboard, used to
    /// be taken and shown on that night; a re-plan keeps a lost night within
    /// the plan's nights the same way).
    pub fn marked_done(
        &self,
        id: &str,
        mark: &crate::plan::schedule::DoneMark,
        site: &crate::astro::site::Site,
        targets: &[Target],
    ) -> Result<(Visit, Option<String>)> {
        let mut v = self.visit(id)?.clone();
        let note = v.mark_done(mark, site, targets)?;
        if let Some(why) = check_night(v.held_night(site), self.from, self.to) {
            return Err(RungError::invalid(
                "observed",
                format!(
                    "{} as observed ({}): its night {why}: check the observed time",
                    crate::error::one_line_cut(id, 60),
                    mark.observed.round_to_second().iso(),
                ),
            ));
        }
        Ok((v, note))
    }

    /// [`Self::visit`], to change it.
    pub fn visit_mut(&mut self, id: &str) -> Result<&mut Visit> {
        let i = self.visit_index(id)?;
        Ok(&mut self.visits[i])
    }

    fn visit_index(&self, id: &str) -> Result<usize> {
        self.visits
            .iter()
            .position(|v| v.id == id)
            .ok_or_else(|| RungError::Unknown {
                what: "visit".into(),
                name: id.into(),
                hint: "; visit ids look like NAME#N (see the plan's CSV or JSON)".into(),
            })
    }

    /// Mark visits done or lost by id; an unknown id is an error naming it.
    pub fn mark(&mut self, ids: &[String], status: Status) -> Result<()> {
        for id in ids {
            self.visit_mut(id)?.status = status;
        }
        Ok(())
    }

    /// Replace the plan's visits by a re-planned set (`new`: the done visits and
    /// the newly placed ones), keeping the visits marked lost for the record.
    /// Newly placed visits whose id is already taken are renumbered
    /// (`NAME#n` with the smallest free n), so ids stay unique.
    pub fn replace_visits(&mut self, new: Vec<Visit>) {
        let lost: Vec<Visit> = self
            .visits
            .iter()
            .filter(|v| v.status == Status::Lost)
            .cloned()
            .collect();
        let mut used: BTreeSet<String> = lost.iter().map(|v| v.id.clone()).collect();
        for v in new.iter().filter(|v| v.status == Status::Done) {
            used.insert(v.id.clone());
        }
        let mut out: Vec<Visit> = Vec::with_capacity(new.len() + lost.len());
        for mut v in new {
            if v.status != Status::Done {
                if used.contains(&v.id) {
                    let mut n = 1;
                    while used.contains(&format!("{}#{n}", v.target)) {
                        n += 1;
                    }
                    v.id = format!("{}#{n}", v.target);
                }
                used.insert(v.id.clone());
            }
            out.push(v);
        }
        out.extend(lost);
        out.sort_by(|a, b| {
            a.start
                .partial_cmp(&b.start)
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        self.visits = out;
    }

    /// Re-plan at the clock `now`: planned visits that have begun without
    /// being marked done are marked lost (kept for the record, their ids
    /// never reused), then everything not done is placed again from `now`
    /// on (done visits kept, lost nights skipped) with `settings` (the
    /// plan's own site, range, limits and instrument) and the plan's hours a
    /// night unless `hours` is given. Returns the new schedule.
    pub fn replan(
        &mut self,
        settings: &Settings,
        targets: &[Target],
        now: crate::astro::time::Instant,
        hours: Option<f64>,
        horizon_to: Option<NaiveDate>,
    ) -> Result<crate::plan::schedule::Schedule> {
        use crate::plan::schedule::{Request, schedule};
        let hours = hours.unwrap_or(self.hours_per_night);
        for v in self.visits.iter_mut() {
            if v.status == Status::Planned && v.start < now {
                v.status = Status::Lost;
            }
        }
        let done: Vec<Visit> = self
            .visits
            .iter()
            .filter(|v| v.status == Status::Done)
            .cloned()
            .collect();
        let mut req = Request {
            done,
            lost_nights: self.lost_nights.clone(),
            not_before: Some(now),
            ..Request::programme(settings, targets, hours)
        };
        if let Some(h) = horizon_to.or(self.horizon_to) {
            req.horizon_to = h;
        }
        let s = schedule(&req)?;
        self.replace_visits(s.visits.clone());
        self.hours_per_night = hours;
        self.horizon_to = Some(s.horizon_to);
        Ok(s)
    }

    /// Mark a night lost: its planned visits become lost and a re-plan
    /// places nothing on it.
    pub fn lose_night(&mut self, night: NaiveDate) {
        self.lost_nights.insert(night);
        for v in self
            .visits
            .iter_mut()
            .filter(|v| v.night == night && v.status == Status::Planned)
        {
            v.status = Status::Lost;
        }
    }

    /// The plan as pretty JSON text.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }
}

/// Read a plan file; errors name the file, line and column of the break.
pub fn load(path: &Path) -> Result<PlanFile> {
    let meta = std::fs::metadata(path).map_err(|e| RungError::io(path, e))?;
    if meta.is_dir() {
        return Err(RungError::invalid(
            "plan file",
            format!("{} is a folder", path.display()),
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| RungError::io(path, e))?;
    let text = std::str::from_utf8(&bytes).map_err(|e| RungError::InFile {
        loc: Location {
            file: Some(path.to_path_buf()),
            line: Some(
                bytes[..e.valid_up_to()]
                    .iter()
                    .filter(|b| **b == b'\n')
                    .count()
                    + 1,
            ),
            field: None,
        },
        msg: "not UTF-8 text: a plan file is the JSON that rung saves".into(),
    })?;
    parse(text, path)
}

/// The key of a line that holds exactly one `"key": value` pair, as rung's
/// pretty-printed plan files do; `None` otherwise.
fn key_on_line(text: &str, line: usize) -> Option<String> {
    let l = text.lines().nth(line.checked_sub(1)?)?.trim_start();
    let rest = l.strip_prefix('"')?;
    let end = rest.find('"')?;
    let key = &rest[..end];
    let after = rest[end + 1..].trim_start();
    if key.is_empty() || key.contains('\\') || !after.starts_with(':') || after.contains("\":") {
        return None;
    }
    Some(crate::error::one_line_cut(key, 40))
}

/// The parser's message, safe for one line and whole: an unknown key's
/// message lists every key a plan file holds (rung's own words, kept whole)
/// after the key found (the file's text, cut to 60 characters); any other
/// message is cut at 200 characters.
fn parser_words(msg: &str) -> String {
    if let Some(rest) = msg.strip_prefix("unknown field `")
        && let Some((key, expected)) = rest.split_once("`, expected ")
    {
        return format!(
            "unknown field `{}`, expected {}",
            crate::error::one_line_cut(key, 60),
            crate::error::one_line_cut(expected, 1000)
        );
    }
    crate::error::one_line_cut(msg, 200)
}

/// Parse plan text.
pub fn parse(text: &str, path: &Path) -> Result<PlanFile> {
    let p: PlanFile = serde_json::from_str(text).map_err(|e| {
        // serde_json ends its message with the position, which the location
        // already gives: say it once.
        let full = e.to_string();
        let suffix = format!(" at line {} column {}", e.line(), e.column());
        let msg = full.strip_suffix(&suffix).unwrap_or(&full);
        // A value of the wrong kind (an unknown visit kind or status, a bad
        // time) sits on its key's line: name that field.
        let field = if e.classify() == serde_json::error::Category::Data {
            key_on_line(text, e.line())
        } else {
            None
        };
        RungError::InFile {
            loc: Location {
                file: Some(path.to_path_buf()),
                line: (e.line() > 0).then_some(e.line()),
                field,
            },
            msg: format!(
                "not a readable plan file (column {}): {}",
                e.column(),
                parser_words(msg)
            ),
        }
    })?;
    let at = |field: &str, msg: String| RungError::InFile {
        loc: Location {
            file: Some(path.to_path_buf()),
            line: None,
            field: Some(field.into()),
        },
        msg,
    };
    if let Some((field, why)) = check_settings(&p) {
        return Err(at(field, why));
    }
    let mut seen = BTreeSet::new();
    for v in &p.visits {
        let id = crate::error::one_line_cut(&v.id, 60);
        if !seen.insert(v.id.clone()) {
            return Err(at("visits", format!("visit id '{id}' appears twice")));
        }
        if let Some((field, why)) = check_visit(v, p.from, p.to) {
            return Err(at(field, why));
        }
    }
    Ok(p)
}

/// The first of a plan's own settings that is out of bounds, as (field,
/// reason): its format, hours a night, limits, nights and lost nights.
/// [`parse`] asks it of a plan file, [`crate::plan::log::read`] of the plan
/// an observing log starts with.
pub fn check_settings(p: &PlanFile) -> Option<(&'static str, String)> {
    if p.format != FORMAT {
        return Some((
            "format",
            format!(
                "'{}' is not a plan format rung reads (expected {FORMAT})",
                crate::error::one_line_cut(&p.format, 60)
            ),
        ));
    }
    // The plan's own settings are checked here, so a hand-edited value is
    // reported as the file's field rather than as a command-line option.
    if let Some(why) = crate::bounds::hours_per_night_why_not(p.hours_per_night) {
        return Some(("hours_per_night", why));
    }
    if let Err(RungError::Invalid { what, why }) = p.limits() {
        let field = if what == "--min-alt" {
            "min_alt_deg"
        } else {
            "sun_alt_deg"
        };
        return Some((field, why));
    }
    for (field, d) in [("from", p.from), ("to", p.to)] {
        if let Err(e) = crate::astro::time::parse_date(&d.to_string()) {
            return Some((field, e.to_string()));
        }
    }
    if p.to < p.from {
        return Some(("to", format!("{} is before 'from' {}", p.to, p.from)));
    }
    let nights = (p.to - p.from).num_days() + 1;
    if nights > crate::plan::schedule::MAX_NIGHTS as i64 {
        return Some((
            "to",
            format!(
                "{} to {} is {nights} nights, longer than the {} nights a plan may span",
                p.from,
                p.to,
                crate::plan::schedule::MAX_NIGHTS
            ),
        ));
    }
    p.lost_nights
        .iter()
        .find_map(|d| check_night(*d, p.from, p.to).map(|why| ("lost_nights", why)))
}

/// Why the night `d` cannot be marked in a plan of the nights `from` to `to`.
pub fn check_night(d: NaiveDate, from: NaiveDate, to: NaiveDate) -> Option<String> {
    (d < from || d > to).then(|| format!("{d} is outside the plan's nights, {from} to {to}"))
}

/// The first bound an exposure breaks, a visit's totals or one band's, as
/// (field, reason): its exposure time, its sub-exposures, its expected
/// signal-to-noise.
fn exposure_why_not(exptime_s: f64, n_exposures: u32, snr: f64) -> Option<(&'static str, String)> {
    if let Some(why) = crate::bounds::EXPTIME_S.why_not(exptime_s) {
        return Some(("exptime_s", why));
    }
    if !(1..=crate::bounds::MAX_SUB_EXPOSURES).contains(&n_exposures) {
        return Some((
            "n_exposures",
            format!(
                "{n_exposures} is not within 1..{} sub-exposures",
                crate::bounds::MAX_SUB_EXPOSURES
            ),
        ));
    }
    (!(snr.is_finite() && snr > 0.0)).then(|| {
        (
            "snr",
            format!(
                "{} is not a signal-to-noise (a positive number)",
                crate::bounds::show(snr)
            ),
        )
    })
}

/// The first bound a visit breaks, as (field, reason), for a plan of the
/// nights `from` to `to`: a hand-edited visit, or one read back from an
/// observing log, is held to the same bounds as a planned one.
pub fn check_visit(
    v: &crate::plan::schedule::Visit,
    from: NaiveDate,
    to: NaiveDate,
) -> Option<(&'static str, String)> {
    let id = crate::error::one_line_cut(&v.id, 60);
    if v.end < v.start {
        return Some(("visits", format!("visit '{id}' ends before it starts")));
    }
    let of = |field: &'static str, why: String| Some((field, format!("visit '{id}': {why}")));
    if let Some(why) = check_night(v.night, from, to) {
        return of("night", why);
    }
    // A night runs from local noon to local noon, so its visits lie within
    // a day of the night's local midnight, wherever the site is.
    let midnight = v
        .night
        .succ_opt()
        .unwrap_or(v.night)
        .and_time(chrono::NaiveTime::MIN);
    for (field, t) in [("start", v.start), ("end", v.end)] {
        let off_h = (t.to_datetime().naive_utc() - midnight).num_minutes() as f64 / 60.0;
        if !(-26.0..=26.0).contains(&off_h) {
            return of(
                field,
                format!("{} is not in its night of {}", t.iso(), v.night),
            );
        }
    }
    if let Some((field, why)) = exposure_why_not(v.exptime_s, v.n_exposures, v.snr) {
        return of(field, why);
    }
    for (band, snr) in &v.snr_measured {
        if let Some(why) = crate::bounds::SNR.why_not(*snr) {
            return of("snr_measured", format!("band '{band}': {why}"));
        }
        // A band the visit did not expose in would weigh nothing.
        if !v.exposures.is_empty() && !v.exposures.iter().any(|b| &b.band == band) {
            let bands: Vec<&str> = v.exposures.iter().map(|b| b.band.as_str()).collect();
            return of(
                "snr_measured",
                format!("band '{band}': it exposes in {}", bands.join(", ")),
            );
        }
    }
    for b in &v.exposures {
        if b.band.trim().is_empty() {
            return of("exposures", "an exposure without a band".into());
        }
        if let Some((field, why)) = exposure_why_not(b.exptime_s, b.n_exposures, b.snr) {
            let band = crate::error::one_line_cut(&b.band, 20);
            return of("exposures", format!("band '{band}': {field} {why}"));
        }
    }
    // The place kept for a target no longer listed (the views and a
    // re-plan observe it there).
    if let Some(ra) = v.ra_deg
        && !(ra.is_finite() && (0.0..360.0).contains(&ra))
    {
        return of(
            "ra_deg",
            format!(
                "{} is not a right ascension within 0..360 degrees",
                crate::bounds::show(ra)
            ),
        );
    }
    if let Some(dec) = v.dec_deg
        && !(dec.is_finite() && (-90.0..=90.0).contains(&dec))
    {
        return of(
            "dec_deg",
            format!(
                "{} is not a declination within -90..90 degrees",
                crate::bounds::show(dec)
            ),
        );
    }
    if let Some(why) = v
        .seeing_arcsec
        .and_then(|s| crate::bounds::SEEING_ARCSEC.why_not(s))
    {
        return of("seeing_arcsec", why);
    }
    if !(v.airmass.is_finite() && (1.0..=100.0).contains(&v.airmass)) {
        return of(
            "airmass",
            format!(
                "{} is not an airmass within 1..100",
                crate::bounds::show(v.airmass)
            ),
        );
    }
    None
}

/// Save atomically (temp file + fsync + rename).
pub fn save(plan: &PlanFile, path: &Path) -> Result<()> {
    crate::io::atomic::write_atomic(path, plan.to_json().as_bytes())
}
