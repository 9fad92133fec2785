//! What to observe now: every target, with tonight's planned visits, ranked
//! by what is best to do at one instant. The Next view of the terminal UI
//! and `rung next` show this ranking; the UI computes nothing of its own.
//!
//! # The ranking (the project's own rule)
//!
//! A target is *visible* when the instant lies in one of its windows tonight
//! (above the altitude limit and the horizon mask, Sun below its limit).
//! Visible targets come first, by score; the others follow by when their
//! window opens (or not at all tonight).
//!
//! score = priority × (1 + 2 × urgency) × (1 / airmass) × plan factor
//!
//! *Urgency* (0 to 1) is the largest of the named rules below
//! ([`UrgencyRule`]; each row lists the rules that gave it more than 0,
//! JSON `urgency_rules`). They are written here once and each is a function
//! of its own, tested in `tests/plan_now.rs`:
//!
//! | rule | applies to | value |
//! | --- | --- | --- |
//! | `window_closing` | every visible target | 1 − minutes left / 180: 1 as the window closes, 0 with three hours or more left ([`window_closing`]) |
//! | `last_planned_night` | a transient with a plan | 1 when tonight's planned visit is the last the plan gives it (its useful window closes), else 0 ([`last_planned_night`]) |
//! | `only_tonight` | a target whose method judges epochs (`Method::covered`) | 1 when no instant inside tomorrow night's windows (sampled every 10 minutes) gives the epoch a visit tonight gives, by the method's own measure: for a pulsator its phase bin, for any target a night without a window tomorrow; else 0 ([`only_tonight`]) |
//! | `parallax_extreme` | a parallax target | 0 at 80 % of the yearly extreme of its right-ascension parallax factor, rising to 1 at the extreme ([`parallax_extreme`]) |
//!
//! The *plan factor* is 1.5 for a planned visit due now (its start within 30
//! minutes, or passed and not done), 1.2 for one later tonight, 1 for a
//! target without a visit tonight (still a candidate to fill time).
//!
//! A supernova already observed (its fitted peak's error given,
//! `peak_err_mag`) has nothing to plan, as in the budget
//! (`plan::budget::observed_words`): its row says so in the budget's words,
//! no urgency rule applies and its score is 0, so it follows every target in
//! a window that is worth a visit. A visible target that nothing else
//! explains says "nothing urgent: ranked by priority and airmass".
//!
//! A field is one unit here as in the budget and the plan: one row for the
//! field (its visits serve every star of its pointing, and its row says how
//! many), none for each of its stars (`crate::ladder::field::link`).
//!
//! Each row also says the current altitude, hour angle, airmass, Moon
//! distance, minutes left above the limit, the exposure to take (the planned
//! visit's, else the target's nearest planned visit's) and the Sun caution
//! where it applies.

use crate::astro::airmass::kasten_young;
use crate::astro::frames::Context;
use crate::astro::night::Night;
use crate::astro::sun_caution_at;
use crate::astro::time::Instant;
use crate::error::Result;
use crate::io::targets::{Kind, Target};
use crate::ladder::{BandExposure, Epoch, Method, Setting};
use crate::plan::file::PlanFile;
use crate::plan::schedule::{Status, Visit};
use crate::programme::Settings;
use chrono::NaiveDate;
use serde::Serialize;

/// "visit ID done at HH:MM UTC (HH:MM local)": a done visit at its observed
/// start ([`Visit::span`]), as the queue's reasons, `rung next` and the Now
/// view say it; with ", S/N 62 measured" when the observer gave one
/// ([`Visit::measured_text`]) and the seeing and comment noted
/// ([`Visit::noted_words`]).
pub fn done_words(v: &Visit, tz: &chrono_tz::Tz) -> String {
    let t = v.span().0;
    format!(
        "visit {} done at {} UTC ({} local){}{}",
        v.id,
        crate::output::clock_hm(t, &chrono_tz::UTC),
        crate::output::clock_hm(t, tz),
        v.measured_text()
            .map(|m| format!(", S/N {m} measured"))
            .unwrap_or_default(),
        v.noted_words()
            .iter()
            .map(|w| format!(", {w}"))
            .collect::<String>()
    )
}

/// One row of the queue.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NowRow {
    /// 1 for the best.
    pub rank: usize,
    /// Target name.
    pub target: String,
    /// Method.
    pub kind: Kind,
    /// The planned visit tonight this row stands for (what `--done` takes).
    pub visit_id: Option<String>,
    /// Its planned start (UTC).
    pub planned_start: Option<Instant>,
    /// The visit of the target tonight last marked done, when there is one.
    pub done_visit_id: Option<String>,
    /// Its start as observed (UTC, [`Visit::span`]: the observed time the
    /// observer marked, else the planned start), the time every surface
    /// shows for a done visit.
    pub done_start: Option<Instant>,
    /// In a window now.
    pub visible: bool,
    /// Observed (refracted) altitude now, degrees.
    pub altitude_deg: f64,
    /// Hour angle now, hours (west positive).
    pub hour_angle_h: f64,
    /// Kasten–Young airmass now (none below the horizon).
    pub airmass: Option<f64>,
    /// Distance from the Moon, degrees.
    pub moon_separation_deg: f64,
    /// Minutes left in the current window (0 when not visible).
    pub minutes_left: f64,
    /// When its next window tonight opens, if it is not visible now.
    pub window_opens: Option<Instant>,
    /// The exposure to take, band by band (empty when no plan gives one).
    pub exposures: Vec<BandExposure>,
    /// Total exposure, seconds.
    pub exptime_s: Option<f64>,
    /// Frames.
    pub n_exposures: Option<u32>,
    /// The Sun caution, where it applies.
    pub sun_caution: Option<String>,
    /// The target's priority.
    pub priority: f64,
    /// Urgency, 0 to 1: the largest of `urgency_rules` (0 when none applies).
    pub urgency: f64,
    /// The urgency rules that gave more than 0, with their values and why.
    pub urgency_rules: Vec<Urgent>,
    /// Why it ranks where it does, in words.
    pub reasons: Vec<String>,
    /// The score (0 when not visible).
    pub score: f64,
}

impl NowRow {
    /// The row's "why" as `rung next` and the Next view print it: the Sun
    /// caution first (its own words, "SUN CAUTION: ..."), then the reasons,
    /// joined by "; ".
    pub fn why(&self) -> String {
        self.sun_caution
            .iter()
            .chain(&self.reasons)
            .map(String::as_str)
            .collect::<Vec<_>>()
            .join("; ")
    }
}

/// The ranked queue at one instant.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Queue {
    /// The instant (UTC).
    pub at: Instant,
    /// Tonight (the local date its evening starts on).
    pub night: NaiveDate,
    /// The Sun's altitude, degrees (geometric).
    pub sun_altitude_deg: f64,
    /// Whether the Sun is below the limit.
    pub dark: bool,
    /// Rows, best first.
    pub rows: Vec<NowRow>,
}

/// The urgency rules of the queue (see the module documentation's table).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum UrgencyRule {
    /// The current window closes soon ([`window_closing`]).
    WindowClosing,
    /// A transient's last planned night ([`last_planned_night`]).
    LastPlannedNight,
    /// The epoch of a visit tonight cannot be had tomorrow night ([`only_tonight`]).
    OnlyTonight,
    /// A parallax factor near its yearly extreme ([`parallax_extreme`]).
    ParallaxExtreme,
}

impl UrgencyRule {
    /// The rule's name, as JSON writes it.
    pub fn name(self) -> &'static str {
        match self {
            UrgencyRule::WindowClosing => "window_closing",
            UrgencyRule::LastPlannedNight => "last_planned_night",
            UrgencyRule::OnlyTonight => "only_tonight",
            UrgencyRule::ParallaxExtreme => "parallax_extreme",
        }
    }
}

/// One urgency rule that applies to a row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Urgent {
    /// The rule.
    pub rule: UrgencyRule,
    /// Its value, 0 to 1.
    pub value: f64,
    /// Why, in words.
    pub why: String,
}

/// Minutes left in a window at which `window_closing` starts to rise.
pub const WINDOW_CLOSING_MIN: f64 = 180.0;

/// Rule `window_closing`: 1 − minutes left / 180, within 0 to 1.
pub fn window_closing(minutes_left: f64) -> f64 {
    (1.0 - minutes_left / WINDOW_CLOSING_MIN).clamp(0.0, 1.0)
}

/// Rule `last_planned_night`: 1 when a transient has a planned visit tonight
/// and none on a later night, else 0.
pub fn last_planned_night(planned_tonight: bool, planned_later: bool) -> f64 {
    if planned_tonight && !planned_later {
        1.0
    } else {
        0.0
    }
}

/// Step between the instants of tomorrow night the `only_tonight` rule
/// tries, seconds (10 minutes).
pub const ONLY_TONIGHT_STEP_S: f64 = 600.0;

/// Rule `only_tonight`: 1 when none of `tomorrow` (instants inside tomorrow
/// night's windows, as epochs) gives the epoch `tonight` gives by the
/// method's own measure (`Method::covered`), else 0. With no instant
/// tomorrow (no window) it is 1. The method's reason is returned with a 0.
pub fn only_tonight(
    m: &dyn Method,
    s: &Setting,
    tonight: &Epoch,
    tomorrow: &[Epoch],
) -> Result<(f64, Option<String>)> {
    if tomorrow.is_empty() {
        return Ok((1.0, None));
    }
    let covered = m.covered(s, tomorrow, std::slice::from_ref(tonight))?;
    Ok(match covered.into_iter().next().flatten() {
        Some(why) => (0.0, Some(why)),
        None => (1.0, None),
    })
}

/// The ratio at which `parallax_extreme` starts to rise.
pub const PARALLAX_EXTREME_FROM: f64 = 0.8;

/// Rule `parallax_extreme`: 0 up to 80 % of the yearly extreme of the
/// right-ascension parallax factor (`ratio` = |factor now| / its extreme),
/// rising linearly to 1 at the extreme.
pub fn parallax_extreme(ratio: f64) -> f64 {
    ((ratio - PARALLAX_EXTREME_FROM) / (1.0 - PARALLAX_EXTREME_FROM)).clamp(0.0, 1.0)
}

/// Instants inside `windows`, every [`ONLY_TONIGHT_STEP_S`], as epochs like `tpl`.
fn sample_epochs(windows: &[(Instant, Instant)], tpl: &Epoch) -> Vec<Epoch> {
    let mut out = Vec::new();
    for (a, b) in windows {
        let span = b.seconds_since(a);
        let n = (span / ONLY_TONIGHT_STEP_S).floor() as usize;
        for k in 0..=n {
            out.push(Epoch {
                time: a.add_seconds((k as f64 * ONLY_TONIGHT_STEP_S).min(span)),
                ..tpl.clone()
            });
        }
    }
    out
}

/// The queue at `now` (see the module documentation).
pub fn queue(
    settings: &Settings,
    targets: &[Target],
    plan: Option<&PlanFile>,
    now: Instant,
) -> Result<Queue> {
    let site = &settings.site;
    let limits = settings.limits;
    let night_date = crate::programme::tonight(site, now)?;
    let night = Night::shared(site, night_date)?;
    let ctx = if now >= night.start && now < night.end {
        night.context(now)
    } else {
        Context::exact(site, now)?
    };
    let sun = ctx.sun();
    let sun_altitude_deg = sun.alt_geom_rad.to_degrees();
    let dark = sun_altitude_deg < limits.sun_alt_deg;
    let moon = ctx.moon();
    let tomorrow = night_date
        .succ_opt()
        .map(|d| Night::shared(site, d))
        .transpose()?;
    let visits: &[Visit] = plan.map_or(&[], |p| &p.visits);
    let mut rows: Vec<NowRow> = Vec::new();
    let links = crate::ladder::field::link(targets);
    for (ti, t) in targets.iter().enumerate() {
        use crate::ladder::field::Role;
        // A star of a field is observed in its field's visits: the field's
        // row stands for it.
        let stars = match links.role(ti) {
            Role::Member(_) => continue,
            Role::Field(g) => g.members.len(),
            _ => 0,
        };
        let place = t.place();
        let obs = ctx.observe(&place);
        let alt = obs.alt_rad.to_degrees();
        let tn = night.windows(&place, &limits);
        let current = tn
            .windows
            .iter()
            .find(|(a, b)| now >= *a && now < *b)
            .copied();
        let visible = current.is_some() && dark;
        let minutes_left = current.map_or(0.0, |(_, b)| b.seconds_since(&now) / 60.0);
        let window_opens = if visible {
            None
        } else {
            tn.windows.iter().map(|w| w.0).find(|a| *a > now)
        };
        // Tonight's next planned visit of the target, and any planned visit
        // of it (for the exposure).
        let mine: Vec<&Visit> = visits.iter().filter(|v| v.target == t.name).collect();
        let tonight_visit = mine
            .iter()
            .filter(|v| v.night == night_date && v.status == Status::Planned && v.end > now)
            .min_by(|a, b| {
                a.start
                    .partial_cmp(&b.start)
                    .unwrap_or(std::cmp::Ordering::Equal)
            })
            .copied();
        // The visit of it marked done tonight last, at its observed start
        // (observed tonight: Visit::held_night, whatever night it was
        // planned for).
        let done_tonight = mine
            .iter()
            .filter(|v| v.status == Status::Done && v.held_night(site) == night_date)
            .max_by(|a, b| Visit::by_span_start(a, b))
            .copied();
        let source = tonight_visit.or_else(|| {
            mine.iter()
                .filter(|v| v.status != Status::Lost)
                .min_by(|a, b| {
                    a.start
                        .seconds_since(&now)
                        .abs()
                        .total_cmp(&b.start.seconds_since(&now).abs())
                })
                .copied()
        });
        let mut reasons = Vec::new();
        if stars > 0 {
            reasons.push(format!("field: one pointing serves its {stars} stars"));
        }
        // A supernova already observed: nothing to plan (as the budget says).
        let nothing_to_plan = crate::plan::budget::observed_words(t);
        reasons.extend(nothing_to_plan.clone());
        // No rule makes a target with nothing to plan urgent.
        let mut rules: Vec<Urgent> = Vec::new();
        if visible && nothing_to_plan.is_none() {
            let u = window_closing(minutes_left);
            if u > 0.0 {
                rules.push(Urgent {
                    rule: UrgencyRule::WindowClosing,
                    value: u,
                    why: format!("window closes in {minutes_left:.0} min"),
                });
            }
        }
        if t.kind == Kind::Transient && plan.is_some() && nothing_to_plan.is_none() {
            let later = mine
                .iter()
                .any(|v| v.status == Status::Planned && v.night > night_date);
            let u = last_planned_night(tonight_visit.is_some(), later);
            if u > 0.0 {
                rules.push(Urgent {
                    rule: UrgencyRule::LastPlannedNight,
                    value: u,
                    why: "last planned night of its useful window".into(),
                });
            }
        }
        if let Some(m) = settings
            .method(t.kind)
            .filter(|_| nothing_to_plan.is_none())
        {
            // The epoch a visit tonight gives: the planned visit's, else now.
            let at = tonight_visit.map_or(now, |v| v.mid());
            // The exposure a visit tonight would take: as expected (a done
            // visit's measured signal-to-noise was of that visit alone).
            let tpl = source.map_or_else(|| placeholder_epoch(at), |v| v.expected_epoch());
            let tonight_e = Epoch {
                time: at,
                ..tpl.clone()
            };
            let tomorrow_windows = tomorrow
                .as_ref()
                .map(|tm| tm.windows(&place, &limits).windows)
                .unwrap_or_default();
            let tomorrow_e = sample_epochs(&tomorrow_windows, &tpl);
            // A target its method cannot judge (a pulsator without an
            // ephemeris) gets nothing from this rule.
            if let Ok((u, _)) = only_tonight(m, &settings.setting(t), &tonight_e, &tomorrow_e)
                && u > 0.0
            {
                rules.push(Urgent {
                    rule: UrgencyRule::OnlyTonight,
                    value: u,
                    why: if tomorrow_e.is_empty() {
                        "no window tomorrow night".into()
                    } else if t.kind == Kind::Pulsator {
                        "its phase bin cannot be reached tomorrow night".into()
                    } else {
                        "its epoch cannot be had tomorrow night".into()
                    },
                });
            }
        }
        if t.kind == Kind::Parallax {
            let ratio = parallax_ratio(now, t)?;
            let u = parallax_extreme(ratio);
            if u > 0.0 {
                rules.push(Urgent {
                    rule: UrgencyRule::ParallaxExtreme,
                    value: u,
                    why: format!(
                        "parallax factor {:.0} % of its yearly extreme",
                        100.0 * ratio
                    ),
                });
            }
        }
        let urgency = rules.iter().map(|r| r.value).fold(0.0, f64::max);
        reasons.extend(rules.iter().map(|r| r.why.clone()));
        if let Some(v) = done_tonight {
            // First, where an 80-column line shows it whole.
            reasons.insert(0, done_words(v, &site.timezone));
        }
        let plan_factor = match tonight_visit {
            Some(v) if v.start.seconds_since(&now) <= 1800.0 => {
                reasons.push(format!("planned visit {} due now", v.id));
                1.5
            }
            Some(v) => {
                reasons.push(format!("planned visit {} later tonight", v.id));
                1.2
            }
            None => 1.0,
        };
        let airmass = kasten_young(alt);
        if !dark {
            reasons.push(format!(
                "the Sun is at {sun_altitude_deg:.1}°, above the {:.0}° limit",
                limits.sun_alt_deg
            ));
        } else if !visible {
            reasons.push(match window_opens {
                Some(a) => format!(
                    "below the limit until {}",
                    crate::output::clock_hm(a, &site.timezone)
                ),
                None => "no window left tonight".into(),
            });
        }
        if visible && reasons.is_empty() {
            reasons.push("nothing urgent: ranked by priority and airmass".into());
        }
        let score = if visible && nothing_to_plan.is_none() {
            t.priority.max(1e-3) * (1.0 + 2.0 * urgency) * plan_factor / airmass.unwrap_or(40.0)
        } else {
            0.0
        };
        rows.push(NowRow {
            rank: 0,
            target: t.name.clone(),
            kind: t.kind,
            visit_id: tonight_visit.map(|v| v.id.clone()),
            planned_start: tonight_visit.map(|v| v.start),
            done_visit_id: done_tonight.map(|v| v.id.clone()),
            done_start: done_tonight.map(|v| v.span().0),
            visible,
            altitude_deg: alt,
            hour_angle_h: obs.ha_rad.to_degrees() / 15.0,
            airmass,
            moon_separation_deg: obs.separation_rad(&moon).to_degrees(),
            minutes_left,
            window_opens,
            exposures: source.map(|v| v.exposures.clone()).unwrap_or_default(),
            exptime_s: source.map(|v| v.exptime_s),
            n_exposures: source.map(|v| v.n_exposures),
            sun_caution: sun_caution_at(site, &ctx, &place),
            priority: t.priority,
            urgency,
            urgency_rules: rules,
            reasons,
            score,
        });
    }
    rows.sort_by(|a, b| {
        b.visible
            .cmp(&a.visible)
            .then(b.score.total_cmp(&a.score))
            .then(match (a.window_opens, b.window_opens) {
                (Some(x), Some(y)) => x.partial_cmp(&y).unwrap_or(std::cmp::Ordering::Equal),
                (Some(_), None) => std::cmp::Ordering::Less,
                (None, Some(_)) => std::cmp::Ordering::Greater,
                (None, None) => std::cmp::Ordering::Equal,
            })
            .then(a.target.cmp(&b.target))
    });
    for (i, r) in rows.iter_mut().enumerate() {
        r.rank = i + 1;
    }
    Ok(Queue {
        at: now,
        night: night_date,
        sun_altitude_deg,
        dark,
        rows,
    })
}

/// |right-ascension parallax factor now| over its largest in the year ahead
/// (sampled 48 times), 0 to 1 (the factors from the parallax method,
/// `ladder::parallax::parallax_factors_at`).
fn parallax_ratio(now: Instant, t: &Target) -> Result<f64> {
    let (ra, dec) = (t.ra_deg.to_radians(), t.dec_deg.to_radians());
    let (pa_now, _) = crate::ladder::parallax::parallax_factors_at(now, ra, dec)?;
    let mut extreme: f64 = 0.0;
    for k in 0..48 {
        let (pa, _) = crate::ladder::parallax::parallax_factors_at(
            now.add_seconds(k as f64 * 365.25 * 86_400.0 / 48.0),
            ra,
            dec,
        )?;
        extreme = extreme.max(pa.abs());
    }
    Ok(if extreme > 0.0 {
        (pa_now.abs() / extreme).min(1.0)
    } else {
        0.0
    })
}

/// An epoch at `at` for a target without a planned visit (only its time
/// matters to `Method::covered`).
fn placeholder_epoch(at: Instant) -> Epoch {
    Epoch {
        time: at,
        exptime_s: 0.0,
        n_exposures: 0,
        snr: 0.0,
        airmass: 1.0,
        visit_s: 0.0,
        exposures: vec![],
    }
}
