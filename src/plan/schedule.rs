//! The season scheduler: places each method's proposed epochs as visits on
//! nights and times, never two at once and never outside a window.
//!
//! # The scheduling rule (deterministic for the same input)
//!
//! 1. Each night of the range gets a capacity: the lesser of `hours_per_night`
//!    and its dark time (Sun below the limit); a night marked lost gets none.
//!    Visits marked done in an earlier plan are kept as they are and occupy
//!    their time first. Nothing is placed before `not_before` (a re-plan
//!    during the night places only what is still ahead).
//! 2. Each target's method gives the epochs its distance goal takes
//!    (`Method::goal`, the goal from `ladder::goal_for`: the budget's epochs),
//!    or, for a target without a goal, its own proposal (`Method::propose`),
//!    over the range extended to the horizon (`Request::horizon_to`; `rung
//!    plan --to` shorter than the programme's range makes a plan a slice of
//!    the programme): epochs after the range's last night are counted as
//!    planned in the outcomes (`Outcome::later`).
//!    A done visit of the target absorbs the proposed epoch nearest to it.
//! 3. Visits that would not buy precision are not planned: a target whose
//!    goal verdict is "not observable" (a supernova peak that cannot be
//!    sampled, a parallax factor too small) gets none, and a transient's
//!    visits stay between its method's first and last epochs (its useful
//!    window).
//! 4. Two visits of one target keep the method's spacing
//!    (`Method::min_spacing_s`, one visit a night by default) between their
//!    mid-times, or the method's own epochs' closest separation when it asks
//!    for them closer.
//! 5. Every wanted epoch is a group of alternatives: its own night, then the
//!    nearest nights within its kind's flexibility (parallax ±10 nights,
//!    pulsator and transient ±1), earlier night first on ties; on each night
//!    its preferred time is moved by whole sidereal days (so the hour angle is
//!    kept). The packing core ([`crate::plan::pack`]) places the groups by
//!    priority, each at the feasible start nearest its preferred time, then
//!    moves placed visits inside their windows to open room for the rest.
//! 6. Epochs that fit nowhere are listed as unplaced with the reason.
//! 7. The fill: so that the hours given are used whenever a target can use
//!    them, every target gets on each of the first [`FILL_NIGHTS`] nights a
//!    candidate extra visit, centred on its highest point in the dark, with
//!    the exposure of its nearest epoch. Its value is the target's priority
//!    times the fraction by which it lowers the predicted σd/d of the
//!    target's epochs (`Method::predict` without it; with it, the method's
//!    ranking, `Method::rank_then_each_extra`, which may work the candidate
//!    out at its night's interpolated context); candidates
//!    buying less than [`MIN_FILL_GAIN`] are dropped (a pulsator at its
//!    relation floor, a phase bin already covered, a transient past its
//!    useful window). The packing core places them after the method's own
//!    epochs (whose value is the priority), highest value first.
//!
//! The value of a schedule is the sum of its placed visits' values (the
//! priority-weighted value the quality tests compare with the exact optimum
//! of the same packing problem and with its linear-programming bound).
//!
//! Each visit includes its overheads (`Epoch::visit_s`), so consecutive visits
//! leave room for slews and readouts. A printed precision is finite and at
//! most 100 % ([`shown_precision`]); beyond, the visits give no distance and
//! the outcome says so.

use crate::astro::airmass::kasten_young;
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::sun_caution_at;
use crate::astro::time::Instant;
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{
    DEFAULT_SPACING_S, Epoch, ExposureModel, MethodSet, Prediction, Setting, goal_for, with_goal,
};
use crate::programme::Settings;
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet, HashMap};

/// Length of the sidereal day, SI seconds (common practice: 23 h 56 m 4.09 s).
pub const SIDEREAL_DAY_S: f64 = 86_164.090_5;
// The longest range and its check live with the settings (a range is a
// setting); the scheduler's names for them stay.
pub use crate::programme::{MAX_NIGHTS, dates};

/// What became of a visit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Placed, not yet observed.
    Planned,
    /// Observed; kept by every re-plan.
    Done,
    /// Lost (weather, fault); its epoch is placed again by a re-plan.
    Lost,
}

impl Status {
    /// "planned", "done" or "lost", as every output writes it.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Planned => "planned",
            Status::Done => "done",
            Status::Lost => "lost",
        }
    }
}

/// One placed visit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Visit {
    /// Stable identifier, `target#n`.
    pub id: String,
    /// Target name.
    pub target: String,
    /// Method.
    pub kind: Kind,
    /// The night (local date of its evening).
    pub night: NaiveDate,
    /// Start (slew begins), UTC.
    pub start: Instant,
    /// End, UTC.
    pub end: Instant,
    /// Total exposure, seconds.
    pub exptime_s: f64,
    /// Number of sub-exposures.
    pub n_exposures: u32,
    /// Expected signal-to-noise.
    pub snr: f64,
    /// Airmass at mid-visit.
    pub airmass: f64,
    /// State.
    pub status: Status,
    /// Sun-proximity and other cautions.
    pub cautions: Vec<String>,
    /// The exposure in each band, primary band first (absent in plan files
    /// written before bands were recorded).
    #[serde(default)]
    pub exposures: Vec<crate::ladder::BandExposure>,
    /// The target's right ascension, ICRS degrees (absent in older plan files).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ra_deg: Option<f64>,
    /// The target's declination, ICRS degrees (absent in older plan files).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dec_deg: Option<f64>,
    /// When a done visit was observed (UTC), as the observer marked it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub observed: Option<Instant>,
    /// Seeing FWHM the observer noted, arcseconds.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seeing_arcsec: Option<f64>,
    /// The observer's comment.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub comment: Option<String>,
    /// The signal-to-noise the observer measured on a done visit, by band
    /// (absent when none was given): while the visit is done, the methods
    /// take it in place of the expected `snr` (the primary band's) and of
    /// the bands' own in `exposures` ([`Visit::epoch`]).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub snr_measured: BTreeMap<String, f64>,
}

impl Visit {
    /// Mid-visit instant: the middle of its [`Visit::span`] (a done visit
    /// where it was observed, any other as planned).
    pub fn mid(&self) -> Instant {
        let (a, b) = self.span();
        a.add_seconds(b.seconds_since(&a) / 2.0)
    }

    /// The span a visit occupies for the re-plan and as shown: a visit with
    /// an observed time (marked done, or marked done and then lost: the
    /// attempt, whose airmass and caution the done mark gave) from that
    /// instant for the visit's duration; any other visit as planned.
    /// Spacing to a target's other visits is counted from a done visit's
    /// span's middle, so a visit marked done earlier or later than planned
    /// moves what may follow it (a lost visit holds no time in a re-plan).
    pub fn span(&self) -> (Instant, Instant) {
        match (self.status, self.observed) {
            (Status::Done | Status::Lost, Some(t)) => {
                (t, t.add_seconds(self.end.seconds_since(&self.start)))
            }
            _ => (self.start, self.end),
        }
    }

    /// The night a visit belongs to as shown and as held by a re-plan: for a
    /// visit with an observed time (done, or done and then lost), the night
    /// its span's middle falls in (a visit observed on another night than
    /// planned moves to it); for any other, its planned night.
    pub fn held_night(&self, site: &Site) -> NaiveDate {
        match (self.status, self.observed) {
            (Status::Done | Status::Lost, Some(_)) => {
                crate::astro::night::night_of(site, self.mid())
            }
            _ => self.night,
        }
    }

    /// Visits in the order of their spans' starts (the order the views
    /// show them in; incomparable starts as equal).
    pub fn by_span_start(a: &Visit, b: &Visit) -> std::cmp::Ordering {
        a.span()
            .0
            .partial_cmp(&b.span().0)
            .unwrap_or(std::cmp::Ordering::Equal)
    }

    /// Mark the visit done as `mark` says: observed from `mark.observed`
    /// (its start), with the airmass at the middle of the span it then
    /// occupies ([`Visit::span`]) for its target's place
    /// ([`Visit::place_in`] `targets`), through the frame of the night that
    /// middle falls in, and the Sun caution of that span, as the scheduler
    /// gives a placed visit's at its placed time: the time a view shows and
    /// the airmass and caution beside it are of the same instants; then the
    /// seeing and the comment (on one line). Returns a note for the
    /// observer when the time looks like a slip: the target below the
    /// horizon at that middle (its airmass then stays as planned) or the
    /// Sun above it. With no place known (an old plan file's visit of a
    /// target no longer listed) the airmass and cautions stay as planned,
    /// with a note. Errors, the visit unchanged: a seeing outside the
    /// instruments' bound ([`crate::bounds::SEEING_ARCSEC`], (0, 30]
    /// arcseconds); no night for that instant (outside the ephemeris span).
    pub fn mark_done(
        &mut self,
        mark: &DoneMark,
        site: &Site,
        targets: &[Target],
    ) -> Result<Option<String>> {
        let snr_measured = self.check_mark(mark, targets)?;
        let mut v = self.clone();
        let note = v.observed_at(site, v.place_in(targets).as_ref(), mark.observed)?;
        v.seeing_arcsec = mark.seeing_arcsec;
        v.snr_measured = snr_measured;
        v.comment = mark
            .comment
            .as_ref()
            .map(|c| c.replace(['\n', '\r'], " "))
            .filter(|c| !c.trim().is_empty());
        *self = v;
        Ok(note)
    }

    /// What [`Visit::mark_done`] refuses of `mark` before it works anything
    /// out (the UI asks it before it closes its prompt, so that a slip is
    /// mended, not retyped): a seeing outside the bound an instrument's
    /// seeing has ([`crate::bounds::SEEING_ARCSEC`]), a measured
    /// signal-to-noise it would not take. Returns the measured values by band.
    pub fn check_mark(&self, mark: &DoneMark, targets: &[Target]) -> Result<BTreeMap<String, f64>> {
        if let Some(s) = mark.seeing_arcsec {
            crate::bounds::SEEING_ARCSEC.check_as("seeing", s)?;
        }
        self.measured_by_band(&mark.snr_measured, targets)
    }

    /// [`Visit::mark_done`]'s status, time, airmass and cautions.
    fn observed_at(
        &mut self,
        site: &Site,
        place: Option<&crate::astro::frames::CatalogPlace>,
        observed: Instant,
    ) -> Result<Option<String>> {
        self.status = Status::Done;
        self.observed = Some(observed);
        let Some(place) = place else {
            return Ok(Some(format!(
                "{}: its target's place is not known, so its airmass stays the planned {:.2}",
                self.id, self.airmass
            )));
        };
        let mid = self.mid();
        let night =
            crate::astro::night::Night::shared(site, crate::astro::night::night_of(site, mid))?;
        let ctx = night.context(mid);
        let alt_deg = ctx.observe(place).alt_rad.to_degrees();
        let sun_alt_deg = ctx.sun().alt_geom_rad.to_degrees();
        let (start, end) = self.span();
        self.cautions = span_cautions(site, &night, place, [start, mid, end]);
        let mut slips = Vec::new();
        match kasten_young(alt_deg) {
            Some(x) => self.airmass = x,
            None => slips.push(format!(
                "'{}' is below the horizon (altitude {alt_deg:.1}°), so its airmass stays the planned {:.2}",
                self.target, self.airmass
            )),
        }
        if sun_alt_deg > 0.0 {
            slips.push(format!("the Sun is up (altitude {sun_alt_deg:.1}°)"));
        }
        Ok((!slips.is_empty()).then(|| {
            format!(
                "at the middle of {} as observed ({}) {}: check the observed time",
                self.id,
                mid.round_to_second().iso(),
                slips.join(" and ")
            )
        }))
    }

    /// The visit's target's place: the listed target's (its space motion
    /// too), else the ICRS place the plan file keeps with the visit (a
    /// fixed place), else none.
    pub fn place_in(&self, targets: &[Target]) -> Option<crate::astro::frames::CatalogPlace> {
        self.target_in(targets).map(|t| t.place()).or_else(|| {
            Some(crate::astro::frames::CatalogPlace::fixed_deg(
                self.ra_deg?,
                self.dec_deg?,
            ))
        })
    }

    /// The visit's target among `targets` (by name), if listed.
    fn target_in<'t>(&self, targets: &'t [Target]) -> Option<&'t Target> {
        targets.iter().find(|t| t.name == self.target)
    }

    /// The visit as an epoch for a method's prediction, at its
    /// [`Visit::mid`]: a done visit where it was observed (its phase, its
    /// parallax factor) and with the signal-to-noise measured on it where
    /// the observer gave one (`snr_measured`, band by band), any other as
    /// planned.
    pub fn epoch(&self) -> Epoch {
        let mut e = self.expected_epoch();
        if self.status != Status::Done {
            return e;
        }
        if let Some(s) = self.primary_band().and_then(|b| self.snr_measured.get(b)) {
            e.snr = *s;
        }
        for b in &mut e.exposures {
            if let Some(s) = self.snr_measured.get(&b.band) {
                b.snr = *s;
            }
        }
        e
    }

    /// [`Visit::epoch`] with the expected signal-to-noise whatever was
    /// measured: the pattern of another visit of the same target.
    pub fn expected_epoch(&self) -> Epoch {
        Epoch {
            time: self.mid(),
            exptime_s: self.exptime_s,
            n_exposures: self.n_exposures,
            snr: self.snr,
            airmass: self.airmass,
            visit_s: self.end.seconds_since(&self.start),
            exposures: self.exposures.clone(),
        }
    }

    /// The band `snr` is of: the first of `exposures`; for a visit without
    /// them (a plan file written before bands were recorded), the one band
    /// a measured signal-to-noise was given for.
    fn primary_band(&self) -> Option<&str> {
        match self.exposures.first() {
            Some(b) => Some(b.band.as_str()),
            None if self.snr_measured.len() == 1 => {
                self.snr_measured.keys().next().map(|k| k.as_str())
            }
            None => None,
        }
    }

    /// The seeing and the comment the observer gave with a mark, as
    /// ["seeing 1.2″", "“thin cirrus”"] (the seeing as typed, the comment on
    /// one line; empty when neither was given): what the night sheet, the
    /// calendar, the plan's listing and `rung next` add to a done visit.
    pub fn noted_words(&self) -> Vec<String> {
        let mut w = Vec::new();
        if let Some(s) = self.seeing_arcsec {
            w.push(format!("seeing {s}″"));
        }
        if let Some(c) = self.comment.as_deref().map(str::trim)
            && !c.is_empty()
        {
            w.push(format!("“{}”", crate::output::one_line(c)));
        }
        w
    }

    /// The status with what the observer noted: "done (seeing 1.2″, “thin
    /// cirrus”)", else "done", "planned", "lost".
    pub fn status_words(&self) -> String {
        let status = self.status.as_str();
        match self.noted_words() {
            w if w.is_empty() => status.to_string(),
            w => format!("{status} ({})", w.join(", ")),
        }
    }

    /// The measured signal-to-noise as text, when the observer gave one:
    /// "62" when it is the primary band's alone, else band by band
    /// ("B 55, V 70"), whole numbers.
    pub fn measured_text(&self) -> Option<String> {
        match self.snr_measured.len() {
            0 => None,
            _ if self.measured_primary_only() => self
                .snr_measured
                .values()
                .next()
                .map(|s| crate::output::num(*s, 0)),
            _ => Some(
                self.snr_measured
                    .iter()
                    .map(|(b, s)| format!("{b} {}", crate::output::num(*s, 0)))
                    .collect::<Vec<_>>()
                    .join(", "),
            ),
        }
    }

    /// Whether the measured signal-to-noise is the primary band's alone.
    pub fn measured_primary_only(&self) -> bool {
        self.snr_measured.len() == 1
            && self
                .primary_band()
                .is_some_and(|p| self.snr_measured.contains_key(p))
    }

    /// The bands this visit exposes in: its `exposures`', else its target's
    /// band (from `targets`).
    fn bands_in(&self, targets: &[Target]) -> Vec<String> {
        if self.exposures.is_empty() {
            self.target_in(targets)
                .map(|t| vec![t.band.clone()])
                .unwrap_or_default()
        } else {
            self.exposures.iter().map(|b| b.band.clone()).collect()
        }
    }

    /// A measured signal-to-noise as given ([`parse_snr_measured`]) by band:
    /// a value without a band is the primary band's. Errors: a value outside
    /// [`crate::bounds::SNR`], a band the visit does not expose in or whose
    /// signal-to-noise its method does not take from the visit
    /// ([`crate::ladder::bands_weighed`]: a field, a plain target, a
    /// supernova's spectrum), a band given twice.
    fn measured_by_band(
        &self,
        given: &[(Option<String>, f64)],
        targets: &[Target],
    ) -> Result<BTreeMap<String, f64>> {
        let mut out = BTreeMap::new();
        if given.is_empty() {
            return Ok(out);
        }
        let bands = self.bands_in(targets);
        let refuse = |why: String| Err(RungError::invalid("snr", format!("{}: {why}", self.id)));
        let weighed = match crate::ladder::bands_weighed(self.kind, &bands) {
            Ok(w) => w,
            Err(why) => {
                return refuse(format!(
                    "{why}: a measured one is not taken (note it with --comment)"
                ));
            }
        };
        for (band, snr) in given {
            if let Some(why) = crate::bounds::SNR.why_not(*snr) {
                return refuse(format!("measured signal-to-noise {why}"));
            }
            let band = match band {
                Some(b) if weighed.contains(b) => b.clone(),
                Some(b) if bands.contains(b) => {
                    return refuse(format!(
                        "the signal-to-noise of its {b} exposure does not enter the distance (those that do: {})",
                        weighed.join(", ")
                    ));
                }
                Some(b) => {
                    return refuse(format!(
                        "it exposes in {}, not in '{b}'",
                        if bands.is_empty() {
                            "no band known".to_string()
                        } else {
                            bands.join(", ")
                        }
                    ));
                }
                None => match weighed.first() {
                    Some(b) => b.clone(),
                    None => {
                        return refuse(
                            "its band is not known (its target is not listed): give BAND=SNR"
                                .into(),
                        );
                    }
                },
            };
            if out.insert(band.clone(), *snr).is_some() {
                return refuse(format!("band '{band}' is given twice"));
            }
        }
        Ok(out)
    }
}

/// A measured signal-to-noise as the observer types it: `62` (the visit's
/// primary band) or `B=55,V=70` (band by band; a bare value among them is
/// the primary band's). Errors name the part that is not a number.
pub fn parse_snr_measured(text: &str) -> Result<Vec<(Option<String>, f64)>> {
    let mut out = Vec::new();
    for part in text.split(',').map(str::trim) {
        let (band, value) = match part.split_once('=') {
            Some((b, v)) if !b.trim().is_empty() => (Some(b.trim().to_string()), v.trim()),
            Some(_) => (None, ""),
            None => (None, part),
        };
        let snr: f64 = value.parse().map_err(|_| {
            RungError::invalid(
                "snr",
                format!("'{part}' is not a signal-to-noise (give 62, or BAND=SNR such as V=62, comma-separated)"),
            )
        })?;
        out.push((band, snr));
    }
    Ok(out)
}

/// How a visit was observed, as the observer marks it done
/// ([`Visit::mark_done`]).
#[derive(Debug, Clone, PartialEq)]
pub struct DoneMark {
    /// When the visit started, as observed (UTC).
    pub observed: Instant,
    /// Seeing FWHM the observer noted, arcseconds.
    pub seeing_arcsec: Option<f64>,
    /// The observer's comment.
    pub comment: Option<String>,
    /// The signal-to-noise the observer measured ([`parse_snr_measured`]):
    /// none, the primary band's, or band by band.
    pub snr_measured: Vec<(Option<String>, f64)>,
}

/// A visit's cautions on `night` at its start, middle and end: the Sun
/// caution at the first of them where it applies.
fn span_cautions(
    site: &Site,
    night: &Night,
    place: &crate::astro::frames::CatalogPlace,
    at: [Instant; 3],
) -> Vec<String> {
    at.into_iter()
        .find_map(|at| sun_caution_at(site, &night.context(at), place))
        .into_iter()
        .collect()
}

/// Everything the scheduler needs.
pub struct Request<'a> {
    /// The site.
    pub site: &'a Site,
    /// The targets.
    pub targets: &'a [Target],
    /// First night.
    pub from: NaiveDate,
    /// Last night, inclusive.
    pub to: NaiveDate,
    /// Window limits.
    pub limits: Limits,
    /// Telescope hours available per night.
    pub hours_per_night: f64,
    /// The distance methods, chosen by target kind.
    pub methods: &'a MethodSet,
    /// The photometry.
    pub em: &'a dyn ExposureModel,
    /// The programme's distance goal for targets without their own (percent).
    pub goal_pct: Option<f64>,
    /// Visits already done (kept as they are).
    pub done: Vec<Visit>,
    /// Nights on which nothing can be placed.
    pub lost_nights: BTreeSet<NaiveDate>,
    /// The last night the methods plan for (at least `to`; a plan shorter
    /// than its programme is a slice of it, see the module documentation):
    /// their epochs after `to` count as planned in the outcomes.
    pub horizon_to: NaiveDate,
    /// No visit is placed before this instant (a re-plan during the night
    /// places only what is still ahead).
    pub not_before: Option<Instant>,
    /// The fields' configuration (a field is planned as one unit,
    /// src/ladder/field.rs).
    pub fields: &'a crate::ladder::field::FieldConfig,
}

/// The last night the methods plan to when a plan is a slice of its
/// programme (`settings`, whose range ends before `programme_to`, the
/// programme's own last night): that night, within the longest span a plan
/// may have from its first night ([`MAX_NIGHTS`]: a first night long before
/// the end of a multi-year programme would otherwise ask for more), and
/// never before the plan's own last night.
pub fn slice_horizon(settings: &Settings, programme_to: NaiveDate) -> NaiveDate {
    let longest = settings.from + chrono::Days::new(MAX_NIGHTS as u64 - 1);
    programme_to.min(longest).max(settings.to)
}

impl<'a> Request<'a> {
    /// A request for a programme: its settings' site, range, limits,
    /// methods, photometry and goal, with `hours_per_night` at the telescope
    /// and nothing done yet.
    pub fn programme(settings: &'a Settings, targets: &'a [Target], hours_per_night: f64) -> Self {
        Request {
            site: &settings.site,
            targets,
            from: settings.from,
            to: settings.to,
            limits: settings.limits,
            hours_per_night,
            methods: &settings.methods,
            em: &settings.photometer,
            goal_pct: settings.goal_pct,
            done: vec![],
            lost_nights: BTreeSet::new(),
            horizon_to: settings.to,
            not_before: None,
            fields: &settings.fields,
        }
    }
}

/// A proposed epoch that found no place.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Unplaced {
    /// Target name.
    pub target: String,
    /// Preferred time.
    pub preferred: Instant,
    /// Why.
    pub reason: String,
}

/// What the placed visits buy one target.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Outcome {
    /// Target name.
    pub target: String,
    /// Method.
    pub kind: Kind,
    /// Its goal, percent.
    pub goal_pct: Option<f64>,
    /// Visits placed (planned) in this schedule.
    pub planned: usize,
    /// Visits already done.
    pub done: usize,
    /// Epochs the method asked for.
    pub requested: usize,
    /// The method's epochs after the plan's last night, up to the horizon,
    /// counted in the prediction as planned.
    pub later: usize,
    /// The method's prediction for the placed and done visits, when there are any.
    pub prediction: Option<Prediction>,
    /// The predicted σd/d to print, percent: the prediction's when it is
    /// finite and at most 100 %, else `None` (the visits give no distance).
    pub distance_precision_pct: Option<f64>,
    /// Whether the goal is met by the placed and done visits.
    pub meets_goal: Option<bool>,
    /// The verdict of what the goal takes (the budget's, from the same
    /// `Method::goal`), for a target with a goal whose method answered.
    pub goal_verdict: Option<crate::ladder::Verdict>,
    /// Notes (errors of the method, no visits).
    pub notes: Vec<String>,
}

impl Outcome {
    /// The verdict a plan shows for the target: the goal's (the budget's)
    /// while every epoch the goal asked for is placed or done (none placed
    /// when it asked for none), else the verdict of what the placed and done
    /// visits buy; `None` without a goal.
    pub fn verdict(&self) -> Option<&crate::ladder::Verdict> {
        self.goal_pct?;
        match (&self.goal_verdict, &self.prediction) {
            (Some(v), _) if self.planned + self.done + self.later >= self.requested => Some(v),
            (_, Some(p)) => Some(&p.verdict),
            (v, None) => v.as_ref(),
        }
    }
}

/// Hours used on one night.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NightUse {
    /// The night.
    pub night: NaiveDate,
    /// Dark hours (Sun below the limit).
    pub dark_hours: f64,
    /// Capacity used for scheduling, hours.
    pub capacity_hours: f64,
    /// Hours placed.
    pub used_hours: f64,
    /// `used_hours` / `capacity_hours` (0 when the night has no capacity).
    pub used_fraction: f64,
    /// Wanted visits (the methods' epochs and the fill) that could have gone
    /// on this night but found no room: 0 means every visit that buys
    /// precision was placed, and the rest of the night has nothing useful
    /// to observe.
    pub wanting: usize,
    /// Whether the night is lost.
    pub lost: bool,
}

/// A schedule.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Schedule {
    /// All visits (done first, then planned), sorted by start.
    pub visits: Vec<Visit>,
    /// Per-target outcome.
    pub outcomes: Vec<Outcome>,
    /// Requests that found no place.
    pub unplaced: Vec<Unplaced>,
    /// Per-night use.
    pub nights: Vec<NightUse>,
    /// The last night the methods planned for.
    pub horizon_to: NaiveDate,
    /// The priority-weighted value of the placed visits (the packing
    /// problem's objective: see the module documentation).
    pub value: f64,
    /// The packing problem the schedule solved (for quality checks).
    #[serde(skip)]
    pub problem: crate::plan::pack::Problem,
    /// Its solution.
    #[serde(skip)]
    pub placements: Vec<crate::plan::pack::Placement>,
}

fn flex_nights(kind: Kind) -> i64 {
    match kind {
        Kind::Parallax => 10,
        // A field's visits serve every star of its pointing (src/ladder/field.rs).
        Kind::Pulsator | Kind::Transient | Kind::Field => 1,
        Kind::Plain => 0,
    }
}

struct NightSlot {
    night: std::sync::Arc<Night>,
    dark: Vec<(Instant, Instant)>,
    capacity_s: f64,
    used_s: f64,
    lost: bool,
}

fn overlaps(a: (Instant, Instant), b: (Instant, Instant)) -> bool {
    a.0 < b.1 && b.0 < a.1
}

/// A visit beyond the method's epochs is added only where it lowers the
/// target's σd/d by at least this fraction of itself (0.5 %): below that it
/// does not buy precision worth a slew (the project's own threshold).
pub const MIN_FILL_GAIN: f64 = 0.005;

/// The fill looks at the first this many nights of a plan (two months, the
/// part an observer re-plans night by night; later nights get their fill
/// when a re-plan reaches them).
pub const FILL_NIGHTS: usize = 62;

/// Shortest spacing the scheduler ever keeps between two visits of one
/// target when the method's own epochs are closer (a method asking for two
/// visits at once gets them one after the other), seconds.
const MIN_SPACING_S: f64 = 0.0;

/// Build a schedule by the rule in the module documentation.
pub fn schedule(req: &Request) -> Result<Schedule> {
    use crate::plan::pack::{self, Fixed, Item, Problem};
    if let Some(why) = crate::bounds::hours_per_night_why_not(req.hours_per_night) {
        return Err(RungError::invalid("--hours-per-night", why));
    }
    let horizon_to = req.horizon_to.max(req.to);
    dates(req.from, horizon_to)?;
    let days = dates(req.from, req.to)?;
    // The methods plan to the horizon: its nights built once, in parallel.
    crate::programme::warm_nights(req.site, req.from, horizon_to, req.targets);
    let mut slots = Vec::with_capacity(days.len());
    for night in Night::shared_range(req.site, req.from, req.to)? {
        let dark = night.dark_intervals(req.limits.sun_alt_deg);
        let dark_s: f64 = dark.iter().map(|(a, b)| b.seconds_since(a)).sum::<f64>() + 0.0;
        let lost = req.lost_nights.contains(&night.date);
        slots.push(NightSlot {
            capacity_s: if lost {
                0.0
            } else {
                dark_s.min(req.hours_per_night * 3600.0)
            },
            used_s: 0.0,
            dark,
            night,
            lost,
        });
    }
    let longest_dark_h = slots
        .iter()
        .map(|s| s.dark.iter().map(|(a, b)| b.seconds_since(a)).sum::<f64>() / 3600.0)
        .fold(0.0, f64::max);
    if req.hours_per_night > longest_dark_h + 1e-9 {
        return Err(RungError::invalid(
            "--hours-per-night",
            format!(
                "{:.2} h is longer than the longest dark time in the range ({longest_dark_h:.2} h with the Sun below {}°)",
                req.hours_per_night, req.limits.sun_alt_deg
            ),
        ));
    }
    let index: HashMap<NaiveDate, usize> = slots
        .iter()
        .enumerate()
        .map(|(i, s)| (s.night.date, i))
        .collect();
    let spans: Vec<(Instant, Instant)> =
        slots.iter().map(|s| (s.night.start, s.night.end)).collect();
    let night_of = |t: Instant| -> Option<usize> { spans.iter().position(|s| t >= s.0 && t < s.1) };
    // Times inside the packer: seconds from the first night's start.
    let origin = slots[0].night.start;
    let secs = |t: Instant| t.seconds_since(&origin);
    let not_before_s = req.not_before.map(|t| secs(t).ceil());
    // A night's windows as whole seconds from the origin where a visit of
    // `dur` seconds may start and end (a second inside each end, not before
    // `not_before`), those too short left out.
    let visit_windows = |wins: &[(Instant, Instant)], dur: f64| -> Vec<(f64, f64)> {
        wins.iter()
            .map(|(a, b)| {
                let a = (secs(*a) + 1.0).ceil();
                let a = not_before_s.map_or(a, |n| a.max(n));
                (a, (secs(*b) - 1.0).floor())
            })
            .filter(|(a, b)| b - a >= dur)
            .collect()
    };
    let by_name: HashMap<&str, usize> = req
        .targets
        .iter()
        .enumerate()
        .map(|(i, t)| (t.name.as_str(), i))
        .collect();

    // Done visits first: they keep their time.
    let mut visits: Vec<Visit> = Vec::new();
    let mut fixed: Vec<Fixed> = Vec::new();
    for v in &req.done {
        let mut v = v.clone();
        v.status = Status::Done;
        // It holds its time on the night it was observed in
        // (Visit::held_night), which is its planned night unless it was
        // observed on another; one observed outside the range's nights
        // keeps its planned night's place, as before.
        if let Some(&i) = index
            .get(&v.held_night(req.site))
            .or_else(|| index.get(&v.night))
        {
            slots[i].used_s += v.end.seconds_since(&v.start);
            fixed.push(Fixed {
                // A done visit of a target no longer listed still occupies its time.
                target: by_name
                    .get(v.target.as_str())
                    .copied()
                    .unwrap_or(req.targets.len()),
                night: i,
                // As observed: the spacing counts from the done time.
                start_s: secs(v.span().0),
                end_s: secs(v.span().1),
            });
        }
        visits.push(v);
    }

    // Every target's proposal over the horizon, in parallel (each method
    // call is independent), then taken in target order so the result does
    // not depend on threads.
    type Proposal = (Vec<Epoch>, Option<crate::ladder::Verdict>);
    // A field is one unit (src/ladder/field.rs): its plan is made once; its
    // visits go to the targets its pointings are centred on (the field, or a
    // star outside the field's own pointing), its other stars ask for none.
    let links = crate::ladder::field::link(req.targets);
    let planner = req
        .methods
        .get::<crate::ladder::pulsator::PulsatorMethod>()
        .map(|pulsator| crate::ladder::field::FieldPlanner {
            pulsator,
            config: req.fields,
        });
    let field_setting = |g: &crate::ladder::field::FieldGroup| {
        crate::ladder::field::FieldSetting::of(
            req.site,
            req.targets,
            g,
            req.from,
            horizon_to,
            req.limits,
            req.goal_pct,
        )
    };
    let field_plans: HashMap<
        usize,
        std::result::Result<crate::ladder::field::FieldReport, String>,
    > = {
        use rayon::prelude::*;
        links
            .groups
            .par_iter()
            .filter(|g| !g.members.is_empty())
            .filter_map(|g| {
                let p = planner.as_ref()?;
                Some((
                    g.field,
                    p.plan(&field_setting(g), req.em).map_err(|e| e.to_string()),
                ))
            })
            .collect()
    };
    let proposals: Vec<Option<Result<Proposal>>> = {
        use rayon::prelude::*;
        req.targets
            .par_iter()
            .enumerate()
            .map(|(ti, t)| {
                use crate::ladder::field::Role;
                match links.role(ti) {
                    Role::Alone => {}
                    Role::Refused(why) => {
                        return Some(Err(RungError::invalid("field", why.to_string())));
                    }
                    Role::Field(g) | Role::Member(g) => {
                        let is_field = g.field == ti;
                        return match field_plans.get(&g.field) {
                            None if is_field => Some(Err(RungError::invalid(
                                "field",
                                format!("'{}' has no pulsators", t.name),
                            ))),
                            None | Some(Err(_)) if !is_field => None,
                            None => None,
                            Some(Err(e)) => Some(Err(RungError::invalid("field", e.clone()))),
                            Some(Ok(r)) => {
                                let e = r.epochs_of(&t.name);
                                if is_field {
                                    let verdict = r.goal_pct.map(|_| r.prediction.verdict.clone());
                                    Some(Ok((e, verdict)))
                                } else if e.is_empty() {
                                    None
                                } else {
                                    Some(Ok((e, None)))
                                }
                            }
                        };
                    }
                }
                let m = req.methods.for_kind(t.kind)?;
                let goal = goal_for(t, req.goal_pct, m);
                let judged = with_goal(t, goal);
                let setting = Setting {
                    site: req.site,
                    target: &judged,
                    from: req.from,
                    to: horizon_to,
                    limits: req.limits,
                };
                // A target with a goal asks for the epochs its goal takes (the
                // budget's); one without, for its method's own proposal.
                Some(match goal {
                    Some(g) => m
                        .goal(&setting, req.em, g)
                        .map(|p| (p.epochs, Some(p.verdict))),
                    None => m.propose(&setting, req.em).map(|e| (e, None)),
                })
            })
            .collect()
    };

    let mut requested: HashMap<usize, usize> = HashMap::new();
    let mut method_notes: HashMap<usize, Vec<String>> = HashMap::new();
    let mut goal_verdicts: HashMap<usize, crate::ladder::Verdict> = HashMap::new();
    let mut later: HashMap<usize, Vec<Epoch>> = HashMap::new();
    let mut spacing_s = vec![0.0; req.targets.len() + 1];
    let mut problem = Problem {
        capacity_s: slots.iter().map(|s| s.capacity_s).collect(),
        spacing_s: Vec::new(),
        items: Vec::new(),
        fixed,
    };
    // Per group: the target and the epoch it stands for.
    let mut groups: Vec<(usize, Epoch, i64)> = Vec::new();
    let mut unplaced = Vec::new();
    let mut windows_cache: HashMap<(usize, usize), Vec<(Instant, Instant)>> = HashMap::new();
    type Useful = Option<(Option<usize>, Option<usize>)>;
    let mut base: Vec<(usize, Vec<Epoch>, Useful)> = Vec::new();
    for ((ti, t), proposal) in req.targets.iter().enumerate().zip(proposals) {
        let Some(proposal) = proposal else {
            continue;
        };
        let m = req.methods.for_kind(t.kind);
        let (mut epochs, verdict) = match proposal {
            Ok(x) => x,
            Err(e) => {
                method_notes
                    .entry(ti)
                    .or_default()
                    .push(format!("no epochs proposed: {e}"));
                continue;
            }
        };
        epochs.sort_by(|a, b| {
            a.time
                .partial_cmp(&b.time)
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        requested.insert(ti, epochs.len());
        // The method's spacing, or its own epochs' closest separation when
        // it asks for them closer.
        let own_gap = epochs
            .windows(2)
            .map(|w| w[1].time.seconds_since(&w[0].time))
            .fold(f64::INFINITY, f64::min);
        spacing_s[ti] = m
            .map_or(DEFAULT_SPACING_S, |m| m.min_spacing_s())
            .min(own_gap)
            .max(MIN_SPACING_S);
        if let Some(v) = &verdict {
            goal_verdicts.insert(ti, v.clone());
            // Visits that cannot give a distance (a peak that cannot be
            // sampled, a target that is not observable enough) are not
            // planned: they would not buy precision.
            if matches!(v, crate::ladder::Verdict::NotObservable { .. }) && !epochs.is_empty() {
                method_notes.entry(ti).or_default().push(format!(
                    "{} visits not planned: they cannot give a distance ({})",
                    epochs.len(),
                    v.text()
                ));
                continue;
            }
        }
        // The done visits give some of the method's epochs, by the method's
        // own measure (`Method::covered`: a pulsator's phase bin, else the
        // nearest epoch in time): those are not planned again.
        let done_e: Vec<Epoch> = req
            .done
            .iter()
            .filter(|d| d.target == t.name)
            .map(|d| d.epoch())
            .collect();
        if !done_e.is_empty() {
            let setting = Setting {
                site: req.site,
                target: t,
                from: req.from,
                to: horizon_to,
                limits: req.limits,
            };
            let given = match m.map(|m| m.covered(&setting, &done_e, &epochs)) {
                Some(Ok(g)) if g.len() == epochs.len() => g,
                Some(Err(e)) => {
                    method_notes.entry(ti).or_default().push(format!(
                        "the method could not say which epochs the done visits give ({}); each done visit stands for the epoch nearest it",
                        crate::error::one_line_cut(&e.to_string(), 160)
                    ));
                    crate::ladder::covered_nearest(&done_e, &epochs)
                }
                _ => crate::ladder::covered_nearest(&done_e, &epochs),
            };
            let why: Vec<String> = given.iter().flatten().cloned().collect();
            if !why.is_empty() {
                method_notes.entry(ti).or_default().push(format!(
                    "{} of the method's visits not planned again: {}",
                    why.len(),
                    why.join("; ")
                ));
            }
            let mut k = 0;
            epochs.retain(|_| {
                k += 1;
                given[k - 1].is_none()
            });
        }
        // A transient's visits stay inside the nights its method asked for
        // (its useful window): never before the first, never after the last.
        let useful = (t.kind == Kind::Transient).then(|| {
            let f = epochs.first().and_then(|e| night_of(e.time));
            let l = epochs.last().and_then(|e| night_of(e.time));
            (f, l)
        });
        let end_s = secs(slots[slots.len() - 1].night.end);
        let place = t.place();
        let mut mine: Vec<Epoch> = req
            .done
            .iter()
            .filter(|d| d.target == t.name)
            .map(|d| d.epoch())
            .collect();
        mine.extend(epochs.iter().cloned());
        base.push((ti, mine, useful));
        for e in epochs {
            let Some(home) = night_of(e.time) else {
                if secs(e.time) >= end_s {
                    later.entry(ti).or_default().push(e);
                } else {
                    unplaced.push(Unplaced {
                        target: t.name.clone(),
                        preferred: e.time,
                        reason: "preferred time is outside the range".into(),
                    });
                }
                continue;
            };
            let g = groups.len();
            let dur = e.visit_s.max(1.0).round();
            let flex = flex_nights(t.kind);
            let mut order: Vec<i64> = vec![0];
            for k in 1..=flex {
                order.push(-k);
                order.push(k);
            }
            for (rank, k) in order.into_iter().enumerate() {
                let ni = home as i64 + k;
                if ni < 0 || ni as usize >= slots.len() {
                    continue;
                }
                let ni = ni as usize;
                if let Some((f, l)) = useful
                    && (f.is_some_and(|f| ni < f) || l.is_some_and(|l| ni > l))
                {
                    continue;
                }
                if slots[ni].lost || slots[ni].capacity_s < dur {
                    continue;
                }
                let wins = windows_cache
                    .entry((ti, ni))
                    .or_insert_with(|| slots[ni].night.windows(&place, &req.limits).windows)
                    .clone();
                let windows = visit_windows(&wins, dur);
                if windows.is_empty() {
                    continue;
                }
                // Preferred time moved by whole sidereal days onto this night.
                let pref = (secs(e.time) + k as f64 * SIDEREAL_DAY_S - dur / 2.0).round();
                problem.items.push(Item {
                    group: g,
                    rank,
                    target: ti,
                    night: ni,
                    value: t.priority.max(1e-3),
                    dur_s: dur,
                    pref_s: pref,
                    windows,
                });
            }
            groups.push((ti, e, flex));
        }
    }
    // The fill (rule 7): one more visit of a target on a night where it
    // buys precision, valued by what it buys.
    let first_fill = groups.len();
    let fill_nights = slots.len().min(FILL_NIGHTS);
    type Fill = (usize, Epoch, f64, Vec<(f64, f64)>);
    // A night's candidate visit: night, epoch, windows.
    type Cand = (usize, Epoch, Vec<(f64, f64)>);
    let fills: Vec<Vec<Fill>> = {
        use rayon::prelude::*;
        base.par_iter()
            .map(|(ti, mine, useful)| {
                let t = &req.targets[*ti];
                // A field's star is measured at the field's visits and counts
                // in the field's distance, not its own: one more visit of it
                // alone buys the field nothing its own method could value.
                if !matches!(links.role(*ti), crate::ladder::field::Role::Alone) {
                    return vec![];
                }
                let Some(m) = req.methods.for_kind(t.kind) else {
                    return vec![];
                };
                if mine.is_empty() {
                    return vec![];
                }
                let goal = goal_for(t, req.goal_pct, m);
                let judged = with_goal(t, goal);
                let setting = Setting {
                    site: req.site,
                    target: &judged,
                    from: req.from,
                    to: horizon_to,
                    limits: req.limits,
                };
                let place = t.place();
                // The method's precision of the target's epochs, then, when
                // it shows one, each night's candidate visit and the
                // precision with each one more (asked together: the method
                // keeps what the extra visit does not change).
                let mut cands: Vec<Cand> = Vec::new();
                let mut cands_for = |p0: &Prediction| -> Vec<Epoch> {
                    if shown_precision(p0.distance_precision_pct).is_none() {
                        return Vec::new();
                    }
                    for (ni, slot) in slots.iter().enumerate().take(fill_nights) {
                        if slot.lost || slot.capacity_s <= 0.0 {
                            continue;
                        }
                        if let Some((f, l)) = useful
                            && (f.is_none_or(|f| ni < f) || l.is_none_or(|l| ni > l))
                        {
                            continue;
                        }
                        let tn = slot.night.windows(&place, &req.limits);
                        let Some(best) = tn.max_altitude_time else {
                            continue;
                        };
                        let Some(tpl) = mine.iter().min_by(|a, b| {
                            a.time
                                .seconds_since(&best)
                                .abs()
                                .total_cmp(&b.time.seconds_since(&best).abs())
                        }) else {
                            continue;
                        };
                        let dur = tpl.visit_s.max(1.0).round();
                        let windows = visit_windows(&tn.windows, dur);
                        // The visit centred on the target's highest point, kept inside a window.
                        let Some(&(w0, w1)) = windows
                            .iter()
                            .find(|(a, b)| {
                                let m = secs(best);
                                m >= *a && m <= *b
                            })
                            .or_else(|| windows.first())
                        else {
                            continue;
                        };
                        let start = (secs(best) - dur / 2.0).round().clamp(w0, w1 - dur);
                        let mid = origin.add_seconds(start + dur / 2.0);
                        let airmass = kasten_young(
                            slot.night.context(mid).observe(&place).alt_rad.to_degrees(),
                        );
                        let cand = Epoch {
                            time: mid,
                            airmass: airmass.unwrap_or(tpl.airmass),
                            ..tpl.clone()
                        };
                        cands.push((ni, cand, windows));
                    }
                    cands.iter().map(|c| c.1.clone()).collect()
                };
                let (p0, preds) = m.rank_then_each_extra(&setting, req.em, mine, &mut cands_for);
                let Some(s0) = p0
                    .ok()
                    .and_then(|p| shown_precision(p.distance_precision_pct))
                else {
                    return vec![];
                };
                let mut out = Vec::new();
                for ((ni, cand, windows), p) in cands.into_iter().zip(preds) {
                    let Some(s1) = p
                        .ok()
                        .and_then(|p| shown_precision(p.distance_precision_pct))
                    else {
                        continue;
                    };
                    let gain = (s0 - s1) / s0;
                    if gain >= MIN_FILL_GAIN {
                        out.push((ni, cand, t.priority.max(1e-3) * gain, windows));
                    }
                }
                out
            })
            .collect()
    };
    for ((ti, _, _), list) in base.iter().zip(fills) {
        for (ni, cand, value, windows) in list {
            let dur = cand.visit_s.max(1.0).round();
            problem.items.push(Item {
                group: groups.len(),
                rank: 0,
                target: *ti,
                night: ni,
                value,
                dur_s: dur,
                pref_s: (secs(cand.time) - dur / 2.0).round(),
                windows,
            });
            groups.push((*ti, cand, 0));
        }
    }
    problem.spacing_s = spacing_s.clone();
    let placements = pack::pack(&problem);
    let mut placed_groups = BTreeSet::new();
    let mut counter: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for v in &visits {
        counter
            .entry(v.target.clone())
            .or_default()
            .insert(v.id.clone());
    }
    let mut new_visits = Vec::new();
    for x in &placements {
        let it = &problem.items[x.item];
        placed_groups.insert(it.group);
        let (ti, e, _) = &groups[it.group];
        let t = &req.targets[*ti];
        let place = t.place();
        let ni = it.night;
        let s = origin.add_seconds(x.start_s);
        let end = origin.add_seconds(x.start_s + it.dur_s);
        slots[ni].used_s += it.dur_s;
        let mid = s.add_seconds(it.dur_s / 2.0);
        let ctx = slots[ni].night.context(mid);
        let airmass = kasten_young(ctx.observe(&place).alt_rad.to_degrees());
        let cautions = span_cautions(req.site, &slots[ni].night, &place, [s, mid, end]);
        new_visits.push(Visit {
            id: String::new(),
            target: t.name.clone(),
            kind: t.kind,
            night: slots[ni].night.date,
            start: s,
            end,
            exptime_s: e.exptime_s,
            n_exposures: e.n_exposures,
            snr: e.snr,
            airmass: airmass.unwrap_or(f64::NAN),
            status: Status::Planned,
            cautions,
            exposures: e.exposures.clone(),
            ra_deg: Some(t.ra_deg),
            dec_deg: Some(t.dec_deg),
            observed: None,
            seeing_arcsec: None,
            comment: None,
            snr_measured: BTreeMap::new(),
        });
    }
    // Ids: NAME#n with the smallest n not yet used by the target, in time order.
    for v in new_visits.iter_mut() {
        let used = counter.entry(v.target.clone()).or_default();
        let mut n = 1;
        while used.contains(&format!("{}#{n}", v.target)) {
            n += 1;
        }
        v.id = format!("{}#{n}", v.target);
        used.insert(v.id.clone());
    }
    visits.extend(new_visits);
    // Which groups have an item at all (once: asked of every item for each
    // unplaced group, this took 8 s at 10,000 targets).
    let mut has_items = vec![false; groups.len()];
    for it in &problem.items {
        if let Some(h) = has_items.get_mut(it.group) {
            *h = true;
        }
    }
    for (g, (ti, e, flex)) in groups.iter().enumerate().take(first_fill) {
        if placed_groups.contains(&g) {
            continue;
        }
        let t = &req.targets[*ti];
        let any = has_items[g];
        let reason = if any {
            format!(
                "no free time inside the target's window within ±{flex} nights that keeps {} from its other visits (windows, other visits, or the {:.1} h per night)",
                spacing_text(spacing_s[*ti]),
                req.hours_per_night
            )
        } else {
            format!(
                "every night within ±{flex} nights of it is lost, already over, outside the range or the target's useful window, or has no window for the target"
            )
        };
        unplaced.push(Unplaced {
            target: t.name.clone(),
            preferred: e.time,
            reason,
        });
    }
    visits.sort_by(|a, b| {
        a.start
            .partial_cmp(&b.start)
            .unwrap_or(std::cmp::Ordering::Equal)
    });

    // Each target's visits, then its prediction (in parallel, in target order).
    let mut by_target: HashMap<&str, Vec<&Visit>> = HashMap::new();
    for v in &visits {
        by_target.entry(v.target.as_str()).or_default().push(v);
    }
    let outcomes: Vec<Outcome> = {
        use rayon::prelude::*;
        let work: Vec<(usize, &Target, Vec<String>)> = req
            .targets
            .iter()
            .enumerate()
            .map(|(ti, t)| (ti, t, method_notes.remove(&ti).unwrap_or_default()))
            .collect();
        work.into_par_iter()
            .filter_map(|(ti, t, mut notes)| {
                use crate::ladder::field::Role;
                match links.role(ti) {
                    // A field's stars are judged with their field.
                    Role::Member(_) => return None,
                    Role::Field(g) => {
                        return field_outcome(
                            req,
                            t,
                            g,
                            planner.as_ref(),
                            &field_setting(g),
                            field_plans.get(&ti),
                            &by_target,
                            &later,
                            notes,
                        );
                    }
                    _ => {}
                }
                let m = req.methods.for_kind(t.kind)?;
                let goal = goal_for(t, req.goal_pct, m);
                let mine: &[&Visit] = by_target.get(t.name.as_str()).map_or(&[], |v| v);
                let later_e: &[Epoch] = later.get(&ti).map_or(&[], |v| v);
                let mut epochs: Vec<Epoch> = mine
                    .iter()
                    .filter(|v| v.status != Status::Lost)
                    .map(|v| v.epoch())
                    .collect();
                epochs.extend(later_e.iter().cloned());
                // Which done visits weigh what was measured (Visit::epoch).
                let measured: Vec<String> = mine
                    .iter()
                    .filter(|v| v.status == Status::Done)
                    .filter_map(|v| v.measured_text().map(|m| format!("{} S/N {m}", v.id)))
                    .collect();
                if !measured.is_empty() {
                    notes.push(format!(
                        "with the signal-to-noise measured on {}",
                        measured.join(", ")
                    ));
                }
                let judged = with_goal(t, goal);
                let setting = Setting {
                    site: req.site,
                    target: &judged,
                    from: req.from,
                    to: horizon_to,
                    limits: req.limits,
                };
                let prediction = if epochs.is_empty() {
                    notes.push("no visits placed".into());
                    None
                } else {
                    match m.predict(&setting, req.em, &epochs) {
                        Ok(p) => Some(p),
                        Err(e) => {
                            notes.push(format!(
                                "these visits alone give no distance yet: {}",
                                crate::error::one_line_cut(&e.to_string(), 160)
                            ));
                            None
                        }
                    }
                };
                let shown = prediction
                    .as_ref()
                    .and_then(|p| shown_precision(p.distance_precision_pct));
                if let Some(p) = &prediction
                    && shown.is_none()
                {
                    notes.push(format!(
                        "these visits give no useful distance (σd/d {})",
                        precision_words(p.distance_precision_pct)
                    ));
                }
                let meets_goal = match (goal, shown) {
                    (Some(g), Some(p)) => Some(p <= g),
                    (Some(_), None) if prediction.is_some() => Some(false),
                    _ => None,
                };
                Some(Outcome {
                    target: t.name.clone(),
                    kind: t.kind,
                    goal_pct: goal,
                    planned: mine.iter().filter(|v| v.status == Status::Planned).count(),
                    done: mine.iter().filter(|v| v.status == Status::Done).count(),
                    requested: requested.get(&ti).copied().unwrap_or(0),
                    later: later_e.len(),
                    prediction,
                    distance_precision_pct: shown,
                    meets_goal,
                    goal_verdict: goal_verdicts.get(&ti).cloned(),
                    notes,
                })
            })
            .collect()
    };
    let mut wanting = vec![0usize; slots.len()];
    for it in &problem.items {
        if !placed_groups.contains(&it.group) {
            wanting[it.night] += 1;
        }
    }
    let nights = slots
        .iter()
        .zip(wanting)
        .map(|(s, wanting)| {
            let capacity_hours = s.capacity_s / 3600.0;
            let used_hours = s.used_s / 3600.0;
            NightUse {
                night: s.night.date,
                dark_hours: s.dark.iter().map(|(a, b)| b.seconds_since(a)).sum::<f64>() / 3600.0
                    + 0.0,
                capacity_hours,
                used_hours,
                used_fraction: if capacity_hours > 0.0 {
                    (used_hours / capacity_hours).min(1.0)
                } else {
                    0.0
                },
                lost: s.lost,
                wanting,
            }
        })
        .collect();
    Ok(Schedule {
        visits,
        outcomes,
        unplaced,
        nights,
        horizon_to,
        value: crate::plan::pack::value(&problem, &placements),
        problem,
        placements,
    })
}

/// A precision fit to print, percent: finite, positive and at most 100 %
/// (beyond that the visits do not give a distance); `None` otherwise.
pub fn shown_precision(pct: f64) -> Option<f64> {
    (pct.is_finite() && pct > 0.0 && pct <= MAX_SHOWN_PRECISION_PCT).then_some(pct)
}

/// The largest σd/d a plan prints, percent: beyond it the distance is not measured.
pub const MAX_SHOWN_PRECISION_PCT: f64 = 100.0;

fn precision_words(pct: f64) -> String {
    if pct.is_finite() && pct > MAX_SHOWN_PRECISION_PCT {
        format!("above {MAX_SHOWN_PRECISION_PCT:.0} %")
    } else {
        "not finite".into()
    }
}

/// A spacing in words ("12 h", "40 min", "3.0 d").
pub fn spacing_text(s: f64) -> String {
    if s >= 2.0 * 86_400.0 {
        format!("{:.1} d", s / 86_400.0)
    } else if s >= 3600.0 {
        format!("{:.0} h", s / 3600.0)
    } else {
        format!("{:.0} min", s / 60.0)
    }
}

/// The outcome of a field: its prediction from the placed and done visits
/// of all its pointings (each under the name of the target it is centred
/// on) and the epochs after the plan's last night, as
/// `FieldPlanner::predict` gives it.
#[allow(clippy::too_many_arguments)]
fn field_outcome(
    req: &Request,
    t: &Target,
    g: &crate::ladder::field::FieldGroup,
    planner: Option<&crate::ladder::field::FieldPlanner>,
    fs: &crate::ladder::field::FieldSetting,
    plan: Option<&std::result::Result<crate::ladder::field::FieldReport, String>>,
    by_target: &HashMap<&str, Vec<&Visit>>,
    later: &HashMap<usize, Vec<Epoch>>,
    mut notes: Vec<String>,
) -> Option<Outcome> {
    let goal = fs.goal_pct;
    let mut planned = 0;
    let mut done = 0;
    let mut requested = 0;
    let mut later_n = 0;
    let mut prediction = None;
    match (plan, planner) {
        (Some(Ok(r)), Some(p)) => {
            requested = r.prediction.epochs.len();
            let mut visits: BTreeMap<String, Vec<Epoch>> = BTreeMap::new();
            for pt in &r.pointings {
                let mine: &[&Visit] = by_target.get(pt.target.as_str()).map_or(&[], |v| v);
                planned += mine.iter().filter(|v| v.status == Status::Planned).count();
                done += mine.iter().filter(|v| v.status == Status::Done).count();
                let mut e: Vec<Epoch> = mine
                    .iter()
                    .filter(|v| v.status != Status::Lost)
                    .map(|v| v.epoch())
                    .collect();
                // Epochs after the plan's last night, asked of this pointing.
                let ti = req.targets.iter().position(|x| x.name == pt.target);
                if let Some(l) = ti.and_then(|i| later.get(&i)) {
                    later_n += l.len();
                    e.extend(l.iter().cloned());
                }
                visits.insert(pt.target.clone(), e);
            }
            if visits.values().all(|v| v.is_empty()) {
                notes.push("no visits placed".into());
            } else {
                match p.predict(fs, req.em, &visits) {
                    Ok(r) => prediction = Some(r.prediction),
                    Err(e) => notes.push(format!(
                        "these visits alone give no distance yet: {}",
                        crate::error::one_line_cut(&e.to_string(), 160)
                    )),
                }
            }
        }
        (Some(Err(e)), _) => notes.push(format!("no epochs proposed: {e}")),
        _ if g.members.is_empty() => notes.push(format!(
            "field '{}' has no pulsators: give its stars field = {}",
            t.name, t.name
        )),
        _ => notes.push("no pulsating-star method to plan the field with".into()),
    }
    let shown = prediction
        .as_ref()
        .and_then(|p| shown_precision(p.distance_precision_pct));
    let meets_goal = match (goal, shown) {
        (Some(g), Some(p)) => Some(p <= g),
        (Some(_), None) if prediction.is_some() => Some(false),
        _ => None,
    };
    Some(Outcome {
        target: t.name.clone(),
        kind: t.kind,
        goal_pct: goal,
        planned,
        done,
        requested,
        later: later_n,
        prediction,
        distance_precision_pct: shown,
        meets_goal,
        goal_verdict: match plan {
            Some(Ok(r)) if goal.is_some() => Some(r.prediction.verdict.clone()),
            _ => None,
        },
        notes,
    })
}

/// The start nearest `pref` such that `[start, start + dur]` lies inside one of
/// `windows` and overlaps none of `busy`; whole seconds, 1 s inside the window edges.
pub fn best_start(
    windows: &[(Instant, Instant)],
    busy: &[(Instant, Instant)],
    pref: Instant,
    dur: f64,
) -> Option<Instant> {
    let mut best: Option<(f64, Instant)> = None;
    for &(w0, w1) in windows {
        let w0 = w0.add_seconds(1.0);
        let w1 = w1.add_seconds(-1.0);
        if w1.seconds_since(&w0) < dur {
            continue;
        }
        // Free gaps inside the window.
        let mut edges: Vec<(Instant, Instant)> = busy
            .iter()
            .copied()
            .filter(|b| overlaps(*b, (w0, w1)))
            .collect();
        edges.sort_by(|a, b| a.0.partial_cmp(&b.0).unwrap_or(std::cmp::Ordering::Equal));
        let mut cursor = w0;
        let mut gaps = Vec::new();
        for (b0, b1) in edges {
            if b0 > cursor {
                gaps.push((cursor, b0));
            }
            if b1 > cursor {
                cursor = b1;
            }
        }
        if w1 > cursor {
            gaps.push((cursor, w1));
        }
        for (g0, g1) in gaps {
            let room = g1.seconds_since(&g0);
            if room < dur {
                continue;
            }
            let off = pref.seconds_since(&g0).clamp(0.0, room - dur).floor();
            let s = g0.add_seconds(off).round_to_second();
            let s = if s < g0 { s.add_seconds(1.0) } else { s };
            if s.add_seconds(dur) > g1 {
                continue;
            }
            let d = s.seconds_since(&pref).abs();
            if best.is_none_or(|(bd, _)| d < bd) {
                best = Some((d, s));
            }
        }
    }
    best.map(|b| b.1)
}

/// A short fingerprint of a targets list (names, coordinates, kinds), so a plan
/// file can tell whether it was made for the list it is loaded with (FNV-1a, 64 bit).
pub fn fingerprint(targets: &[Target]) -> String {
    let mut lines: Vec<String> = targets
        .iter()
        .map(|t| {
            format!(
                "{}|{:.6}|{:.6}|{}",
                t.name,
                t.ra_deg,
                t.dec_deg,
                t.kind.as_str()
            )
        })
        .collect();
    lines.sort();
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in lines.join("\n").bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    format!("{h:016x}")
}
