//! The season scheduler: places each method's proposed epochs as visits on
//! nights and times, never two at once and never outside a window.
//!
//! # The scheduling rule (deterministic for the same input)
//!
//! 1. Each night of the range gets a capacity: the lesser of `hours_per_night`
//!    and its dark time (Sun below the limit); a night marked lost gets none.
//!    Visits marked done in an earlier plan are kept as they are and occupy
//!    their time first.
//! 2. Each target's method gives the epochs its distance goal takes
//!    (`Method::goal`, the goal from `ladder::goal_for`: the budget's epochs),
//!    or, for a target without a goal, its own proposal (`Method::propose`). A done visit
//!    of the target absorbs the proposed epoch nearest to it.
//! 3. Requests are taken in order of target priority (high first), then
//!    preferred time, then target name.
//! 4. A request is placed on its own night if it can be, else on the nearest
//!    night within its kind's flexibility (parallax ±10 nights, pulsator and
//!    transient ±1), earlier night first on ties. On a night, its preferred time
//!    is moved by whole sidereal days (so the hour angle is kept) and the visit
//!    starts as close to that as the target's window, the visits already placed
//!    and the night's capacity allow.
//! 5. Requests that fit nowhere are listed as unplaced with the reason.
//!
//! Each visit includes its overheads (`Epoch::visit_s`), so consecutive visits
//! leave room for slews and readouts.

use crate::astro::airmass::kasten_young;
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::sun_caution_at;
use crate::astro::time::Instant;
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::{Epoch, ExposureModel, MethodSet, Prediction, Setting, goal_for, with_goal};
use crate::programme::Settings;
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet, HashMap};

/// Length of the sidereal day, SI seconds (common practice: 23 h 56 m 4.09 s).
pub const SIDEREAL_DAY_S: f64 = 86_164.090_5;
/// Longest range one schedule may span, nights.
pub const MAX_NIGHTS: usize = 3 * 366;

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
}

impl Visit {
    /// Mid-visit instant.
    pub fn mid(&self) -> Instant {
        self.start
            .add_seconds(self.end.seconds_since(&self.start) / 2.0)
    }

    /// The visit as an epoch for a method's prediction.
    pub fn epoch(&self) -> Epoch {
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
    /// The method's prediction for the placed and done visits, when there are any.
    pub prediction: Option<Prediction>,
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
            (Some(v), _) if self.planned + self.done >= self.requested => Some(v),
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
}

fn flex_nights(kind: Kind) -> i64 {
    match kind {
        Kind::Parallax => 10,
        Kind::Pulsator | Kind::Transient => 1,
        Kind::Plain => 0,
    }
}

/// The dates from `from` to `to` inclusive, checked.
pub fn dates(from: NaiveDate, to: NaiveDate) -> Result<Vec<NaiveDate>> {
    if from > to {
        return Err(RungError::invalid(
            "date range",
            format!("--from {from} is after --to {to}"),
        ));
    }
    let n = (to - from).num_days() as usize + 1;
    if n > MAX_NIGHTS {
        return Err(RungError::invalid(
            "date range",
            format!(
                "{n} nights is longer than the {MAX_NIGHTS} nights a plan or a budget may span"
            ),
        ));
    }
    Ok(from.iter_days().take(n).collect())
}

struct NightSlot {
    night: std::sync::Arc<Night>,
    dark: Vec<(Instant, Instant)>,
    capacity_s: f64,
    used_s: f64,
    busy: Vec<(Instant, Instant)>,
    lost: bool,
}

fn overlaps(a: (Instant, Instant), b: (Instant, Instant)) -> bool {
    a.0 < b.1 && b.0 < a.1
}

/// Build a schedule by the rule in the module documentation.
pub fn schedule(req: &Request) -> Result<Schedule> {
    if !req.hours_per_night.is_finite() || req.hours_per_night <= 0.0 || req.hours_per_night > 24.0
    {
        return Err(RungError::invalid(
            "--hours-per-night",
            format!("{} is not within (0, 24] hours", req.hours_per_night),
        ));
    }
    let days = dates(req.from, req.to)?;
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
            busy: Vec::new(),
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

    // Done visits first.
    let mut visits: Vec<Visit> = Vec::new();
    for v in &req.done {
        if let Some(&i) = index.get(&v.night) {
            slots[i].busy.push((v.start, v.end));
            slots[i].used_s += v.end.seconds_since(&v.start);
        }
        let mut v = v.clone();
        v.status = Status::Done;
        visits.push(v);
    }

    // Requests from the methods.
    struct Req {
        target: usize,
        priority: f64,
        epoch: Epoch,
    }
    let mut reqs: Vec<Req> = Vec::new();
    let mut requested: HashMap<usize, usize> = HashMap::new();
    let mut method_notes: HashMap<usize, Vec<String>> = HashMap::new();
    let mut goal_verdicts: HashMap<usize, crate::ladder::Verdict> = HashMap::new();
    // Every target's proposal, in parallel (each method call is independent),
    // then taken in target order so the result does not depend on threads.
    type Proposal = (Vec<Epoch>, Option<crate::ladder::Verdict>);
    let proposals: Vec<Option<Result<Proposal>>> = {
        use rayon::prelude::*;
        req.targets
            .par_iter()
            .map(|t| {
                let m = req.methods.for_kind(t.kind)?;
                let goal = goal_for(t, req.goal_pct, m);
                let judged = with_goal(t, goal);
                let setting = Setting {
                    site: req.site,
                    target: &judged,
                    from: req.from,
                    to: req.to,
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
    for ((ti, t), proposal) in req.targets.iter().enumerate().zip(proposals) {
        let Some(proposal) = proposal else {
            continue;
        };
        let mut epochs = match proposal {
            Ok((e, v)) => {
                if let Some(v) = v {
                    goal_verdicts.insert(ti, v);
                }
                e
            }
            Err(e) => {
                method_notes
                    .entry(ti)
                    .or_default()
                    .push(format!("no epochs proposed: {e}"));
                continue;
            }
        };
        requested.insert(ti, epochs.len());
        // Each done visit absorbs the nearest proposed epoch.
        for d in req.done.iter().filter(|d| d.target == t.name) {
            if let Some((k, _)) = epochs.iter().enumerate().min_by(|a, b| {
                let da = a.1.time.seconds_since(&d.mid()).abs();
                let db = b.1.time.seconds_since(&d.mid()).abs();
                da.partial_cmp(&db).unwrap_or(std::cmp::Ordering::Equal)
            }) {
                epochs.remove(k);
            }
        }
        for e in epochs {
            reqs.push(Req {
                target: ti,
                priority: t.priority,
                epoch: e,
            });
        }
    }
    reqs.sort_by(|a, b| {
        b.priority
            .partial_cmp(&a.priority)
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(
                a.epoch
                    .time
                    .partial_cmp(&b.epoch.time)
                    .unwrap_or(std::cmp::Ordering::Equal),
            )
            .then(req.targets[a.target].name.cmp(&req.targets[b.target].name))
    });

    let mut windows_cache: HashMap<(usize, usize), Vec<(Instant, Instant)>> = HashMap::new();
    let mut unplaced = Vec::new();
    let mut counter: BTreeMap<String, usize> = BTreeMap::new();
    for v in &visits {
        *counter.entry(v.target.clone()).or_default() += 1;
    }
    for r in &reqs {
        let t = &req.targets[r.target];
        let place = t.place();
        let dur = r.epoch.visit_s.max(1.0).round();
        let home = night_of(r.epoch.time);
        let Some(home) = home else {
            unplaced.push(Unplaced {
                target: t.name.clone(),
                preferred: r.epoch.time,
                reason: "preferred time is outside the range".into(),
            });
            continue;
        };
        let flex = flex_nights(t.kind);
        let mut order: Vec<i64> = vec![0];
        for k in 1..=flex {
            order.push(-k);
            order.push(k);
        }
        let mut placed: Option<(usize, Instant)> = None;
        for k in order {
            let ni = home as i64 + k;
            if ni < 0 || ni as usize >= slots.len() {
                continue;
            }
            let ni = ni as usize;
            if slots[ni].lost || slots[ni].used_s + dur > slots[ni].capacity_s {
                continue;
            }
            let wins = windows_cache
                .entry((r.target, ni))
                .or_insert_with(|| slots[ni].night.windows(&place, &req.limits).windows)
                .clone();
            // Preferred time moved by whole sidereal days onto this night.
            let pref = r
                .epoch
                .time
                .add_seconds(k as f64 * SIDEREAL_DAY_S - dur / 2.0);
            if let Some(s) = best_start(&wins, &slots[ni].busy, pref, dur) {
                placed = Some((ni, s));
                break;
            }
        }
        match placed {
            Some((ni, s)) => {
                let e = s.add_seconds(dur);
                slots[ni].busy.push((s, e));
                slots[ni].used_s += dur;
                let n = counter.entry(t.name.clone()).or_default();
                *n += 1;
                let mid = s.add_seconds(dur / 2.0);
                let ctx = slots[ni].night.context(mid);
                let airmass = kasten_young(ctx.observe(&place).alt_rad.to_degrees());
                let mut cautions = Vec::new();
                for at in [s, mid, e] {
                    let c = slots[ni].night.context(at);
                    if let Some(w) = sun_caution_at(req.site, &c, &place) {
                        cautions.push(w);
                        break;
                    }
                }
                visits.push(Visit {
                    id: format!("{}#{}", t.name, n),
                    target: t.name.clone(),
                    kind: t.kind,
                    night: slots[ni].night.date,
                    start: s,
                    end: e,
                    exptime_s: r.epoch.exptime_s,
                    n_exposures: r.epoch.n_exposures,
                    snr: r.epoch.snr,
                    airmass: airmass.unwrap_or(f64::NAN),
                    status: Status::Planned,
                    cautions,
                    exposures: r.epoch.exposures.clone(),
                });
            }
            None => unplaced.push(Unplaced {
                target: t.name.clone(),
                preferred: r.epoch.time,
                reason: format!(
                    "no free time inside the target's window within ±{flex} nights (windows, other visits, or the {:.1} h per night)",
                    req.hours_per_night
                ),
            }),
        }
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
                let m = req.methods.for_kind(t.kind)?;
                let goal = goal_for(t, req.goal_pct, m);
                let mine: &[&Visit] = by_target.get(t.name.as_str()).map_or(&[], |v| v);
                let epochs: Vec<Epoch> = mine.iter().map(|v| v.epoch()).collect();
                let judged = with_goal(t, goal);
                let setting = Setting {
                    site: req.site,
                    target: &judged,
                    from: req.from,
                    to: req.to,
                    limits: req.limits,
                };
                let prediction = if epochs.is_empty() {
                    notes.push("no visits placed".into());
                    None
                } else {
                    match m.predict(&setting, req.em, &epochs) {
                        Ok(p) => Some(p),
                        Err(e) => {
                            notes.push(format!("no prediction: {e}"));
                            None
                        }
                    }
                };
                let meets_goal = match (goal, &prediction) {
                    (Some(g), Some(p)) => Some(p.distance_precision_pct <= g),
                    _ => None,
                };
                Some(Outcome {
                    target: t.name.clone(),
                    kind: t.kind,
                    goal_pct: goal,
                    planned: mine.iter().filter(|v| v.status == Status::Planned).count(),
                    done: mine.iter().filter(|v| v.status == Status::Done).count(),
                    requested: requested.get(&ti).copied().unwrap_or(0),
                    prediction,
                    meets_goal,
                    goal_verdict: goal_verdicts.get(&ti).cloned(),
                    notes,
                })
            })
            .collect()
    };
    let nights = slots
        .iter()
        .map(|s| NightUse {
            night: s.night.date,
            dark_hours: s.dark.iter().map(|(a, b)| b.seconds_since(a)).sum::<f64>() / 3600.0 + 0.0,
            capacity_hours: s.capacity_s / 3600.0,
            used_hours: s.used_s / 3600.0,
            lost: s.lost,
        })
        .collect();
    Ok(Schedule {
        visits,
        outcomes,
        unplaced,
        nights,
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
