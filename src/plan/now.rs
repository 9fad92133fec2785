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
//! - *urgency* (0 to 1) is the largest of: the window closing (1 when it
//!   closes now, 0 with three hours or more left); a transient on the last
//!   night the plan gives it (1), or with later visits planned (0.3), or
//!   without a plan (0.5); a pulsator whose current phase bin (the method's
//!   bins) is not reachable tomorrow night (1, else 0.2); a parallax target
//!   whose right-ascension parallax factor is near its yearly extreme
//!   (0 at 80 % of the extreme, 1 at the extreme).
//! - *plan factor*: 1.5 for a planned visit due now (its start within 30
//!   minutes, or passed and not done), 1.2 for one later tonight, 1 for a
//!   target without a visit tonight (still a candidate to fill time).
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
use crate::ladder::BandExposure;
use crate::plan::file::PlanFile;
use crate::plan::schedule::{Status, Visit};
use crate::programme::Settings;
use chrono::NaiveDate;
use serde::Serialize;

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
    /// Urgency, 0 to 1.
    pub urgency: f64,
    /// Why it ranks where it does, in words.
    pub reasons: Vec<String>,
    /// The score (0 when not visible).
    pub score: f64,
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

/// Phase bins a pulsator's method uses when its configuration does not say.
const DEFAULT_BINS: usize = 10;

fn bins(settings: &Settings) -> usize {
    settings
        .method(Kind::Pulsator)
        .map(|m| m.config_json())
        .and_then(|j| {
            j.pointer("/defaults/bins")
                .or_else(|| j.pointer("/bins"))
                .and_then(|b| b.as_u64())
        })
        .map_or(DEFAULT_BINS, |b| b.max(1) as usize)
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
    let n_bins = bins(settings);
    let visits: &[Visit] = plan.map_or(&[], |p| &p.visits);
    let mut rows: Vec<NowRow> = Vec::new();
    for t in targets {
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
        let mut urgency: f64 = 0.0;
        if visible {
            let closing = (1.0 - minutes_left / 180.0).clamp(0.0, 1.0);
            if closing > 0.0 {
                reasons.push(format!("window closes in {:.0} min", minutes_left));
            }
            urgency = urgency.max(closing);
        }
        match t.kind {
            Kind::Transient => {
                let later = mine
                    .iter()
                    .any(|v| v.status == Status::Planned && v.night > night_date);
                let u = if plan.is_none() {
                    0.5
                } else if tonight_visit.is_some() && !later {
                    reasons.push("last planned night of its useful window".into());
                    1.0
                } else {
                    0.3
                };
                urgency = urgency.max(u);
            }
            Kind::Pulsator => {
                if let (Some(p), Some(e0)) = (t.period_d, t.epoch_max_bjd) {
                    let at = tonight_visit.map_or(now, |v| v.mid());
                    let bjd = crate::astro::bary::bjd_tdb(site, at, &place)?;
                    let phase = (bjd.days_since(e0) / p).rem_euclid(1.0);
                    let bin = ((phase * n_bins as f64).floor() as usize).min(n_bins - 1);
                    let lo = bin as f64 / n_bins as f64;
                    let hi = (bin + 1) as f64 / n_bins as f64;
                    // Is the bin reached inside tomorrow night's windows?
                    let again = tomorrow.as_ref().is_some_and(|tm| {
                        tm.windows(&place, &limits).windows.iter().any(|(a, b)| {
                            let pa = (phase + a.seconds_since(&at) / 86_400.0 / p).rem_euclid(1.0);
                            let span = b.seconds_since(a) / 86_400.0 / p;
                            if span >= 1.0 {
                                return true;
                            }
                            // The phases [pa, pa + span] (mod 1) meet [lo, hi).
                            let meets = |x0: f64, x1: f64| x0 < hi && x1 >= lo;
                            let end = pa + span;
                            if end <= 1.0 {
                                meets(pa, end)
                            } else {
                                meets(pa, 1.0) || meets(0.0, end - 1.0)
                            }
                        })
                    });
                    if again {
                        urgency = urgency.max(0.2);
                    } else {
                        reasons.push(format!(
                            "phase {phase:.2} (bin {} of {n_bins}) not reachable tomorrow night",
                            bin + 1
                        ));
                        urgency = 1.0;
                    }
                }
            }
            Kind::Parallax => {
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
                if extreme > 0.0 {
                    let ratio = pa_now.abs() / extreme;
                    let u = ((ratio - 0.8) / 0.2).clamp(0.0, 1.0);
                    if u > 0.0 {
                        reasons.push(format!(
                            "parallax factor {:.0} % of its yearly extreme",
                            100.0 * ratio
                        ));
                    }
                    urgency = urgency.max(u);
                }
            }
            _ => {}
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
        let score = if visible {
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
