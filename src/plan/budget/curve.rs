//! The inverse curve of a target: the distance precision σ_d/d its method
//! reaches against the telescope hours invested, from nothing to the best
//! the range allows (the method's floor, or the range's limit).
//!
//! Every point is the method's own answer to a goal ([`crate::ladder::Method::goal`]:
//! the fewest hours that reach it), asked along a ladder of goals from loose
//! to tight: so the curve is what the method would plan, on the method face
//! only, and a change to a method flows into the curve.

use crate::astro::night::night_of;
use crate::io::targets::Target;
use crate::ladder::{Prediction, Verdict};
use crate::programme::Settings;
use chrono::{Datelike, NaiveDate};
use serde::Serialize;

/// Loosest goal asked, as a multiple of the target's goal (and at least
/// [`LOOSEST_PCT`]).
const LOOSE_FACTOR: f64 = 4.0;
/// Loosest goal asked at least, percent.
const LOOSEST_PCT: f64 = 25.0;
/// Each goal of the ladder is this fraction of the one before.
const STEP: f64 = 0.72;
/// Goals asked at most along the ladder (before the last refinements).
const MAX_STEPS: usize = 14;
/// Refinements between the tightest goal reached and the first missed.
const REFINE: usize = 2;

/// One point of a target's inverse curve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurvePoint {
    /// Telescope hours with overheads, clear weather.
    pub hours: f64,
    /// The same hours expected with the site's weather (each night's hours
    /// over its month's clear fraction; calibrations not counted).
    pub hours_expected: f64,
    /// The distance precision σ_d/d reached, percent (`null` at zero hours).
    pub distance_precision_pct: f64,
    /// Number of epochs.
    pub epochs: usize,
    /// The goal asked of the method for this point, percent (`null` at zero hours).
    pub goal_asked_pct: f64,
    /// The marginal gain: σ_d/d won per further clear-weather hour from the
    /// point before, percentage points an hour (`null` at zero hours and at
    /// the first point, where no precision came before).
    pub gain_pct_per_hour: f64,
    /// The nights (local dates of their evenings) of the epochs, for the
    /// weather and the calibrations.
    #[serde(skip)]
    pub nights: Vec<(NaiveDate, f64)>,
}

/// The nights of a prediction's epochs and the clear-weather hours of each
/// (the prediction's hours shared by visit length), in time order.
pub fn epoch_nights(settings: &Settings, p: &Prediction) -> Vec<(NaiveDate, f64)> {
    let total_visit_s: f64 = p.epochs.iter().map(|e| e.visit_s).sum();
    let mut out: Vec<(NaiveDate, f64)> = Vec::new();
    for e in &p.epochs {
        let share = if total_visit_s > 0.0 {
            e.visit_s / total_visit_s
        } else {
            1.0 / p.epochs.len() as f64
        };
        let h = share * p.hours_needed.max(0.0);
        let d = night_of(&settings.site, e.time);
        match out.iter_mut().find(|(n, _)| *n == d) {
            Some(x) => x.1 += h,
            None => out.push((d, h)),
        }
    }
    out.sort_by_key(|x| x.0);
    out
}

fn point(settings: &Settings, p: &Prediction, asked: f64, clear: &[f64; 12]) -> CurvePoint {
    let nights = epoch_nights(settings, p);
    CurvePoint {
        hours: p.hours_needed.max(0.0),
        hours_expected: nights
            .iter()
            .map(|(d, h)| h / clear[(d.month() - 1) as usize])
            .sum(),
        distance_precision_pct: p.distance_precision_pct,
        epochs: p.epochs.len(),
        goal_asked_pct: asked,
        gain_pct_per_hour: f64::NAN,
        nights,
    }
}

/// The marginal gain of each point over the one before (see
/// [`CurvePoint::gain_pct_per_hour`]); `curve` in order of hours.
pub fn set_gains(curve: &mut [CurvePoint]) {
    for i in 1..curve.len() {
        let (a, b) = (&curve[i - 1], &curve[i]);
        let dh = b.hours - a.hours;
        let g = if a.distance_precision_pct.is_finite() && dh > 0.0 {
            (a.distance_precision_pct - b.distance_precision_pct) / dh
        } else {
            f64::NAN
        };
        curve[i].gain_pct_per_hour = g;
    }
}

/// The inverse curve of `t` with the programme's settings: the zero-hours
/// point, then the method's plans for a ladder of goals from
/// max(4 × goal, 25 %) down by a factor 0.72 until the method can no longer
/// reach one in the range (refined twice between the last goal reached and
/// the first missed), kept where more hours buy a better precision. `goal`
/// is the target's own prediction at its goal (the budget row), a point of
/// the curve when it reaches its goal. Empty when the target has no method.
pub fn inverse_curve(
    settings: &Settings,
    t: &Target,
    goal: Option<&Prediction>,
) -> Vec<CurvePoint> {
    let Some(m) = settings.method(t.kind) else {
        return Vec::new();
    };
    inverse_curve_with(settings, t, goal, &mut *m.goal_search())
}

/// [`inverse_curve`] asking its goals of `search` (the target's method's
/// [`crate::ladder::Method::goal_search`], which may already hold the work
/// of the target's own goal).
pub fn inverse_curve_with(
    settings: &Settings,
    t: &Target,
    goal: Option<&Prediction>,
    search: &mut dyn crate::ladder::GoalSearch,
) -> Vec<CurvePoint> {
    let em = &settings.photometer;
    let clear = super::clear_fraction(settings).0;
    let mut ask = |g: f64| -> Option<Prediction> {
        let tg = crate::ladder::with_goal(t, Some(g));
        search.goal(&settings.setting(&tg), em, g).ok()
    };
    let reached = |p: &Prediction| {
        p.verdict == Verdict::Reachable
            && p.distance_precision_pct.is_finite()
            && !p.epochs.is_empty()
    };
    let own_goal = settings.goal_for(t);
    let mut pts: Vec<CurvePoint> = Vec::new();
    if let (Some(p), Some(g)) = (goal, own_goal)
        && reached(p)
    {
        pts.push(point(settings, p, g, &clear));
    }
    let mut g = (own_goal.unwrap_or(10.0) * LOOSE_FACTOR).max(LOOSEST_PCT);
    let mut last_ok: Option<f64> = None;
    let mut first_miss: Option<f64> = None;
    for _ in 0..MAX_STEPS {
        match ask(g) {
            Some(p) if reached(&p) => {
                pts.push(point(settings, &p, g, &clear));
                last_ok = Some(g);
                // The next goal below what this plan already reaches.
                g = g.min(p.distance_precision_pct) * STEP;
            }
            _ => {
                first_miss = Some(g);
                break;
            }
        }
    }
    if let (Some(mut ok), Some(mut miss)) = (last_ok, first_miss) {
        for _ in 0..REFINE {
            let mid = (ok * miss).sqrt();
            match ask(mid) {
                Some(p) if reached(&p) => {
                    pts.push(point(settings, &p, mid, &clear));
                    ok = mid;
                }
                _ => miss = mid,
            }
        }
    }
    // Keep the points where more hours buy a better precision.
    pts.sort_by(|a, b| {
        a.hours.total_cmp(&b.hours).then(
            a.distance_precision_pct
                .total_cmp(&b.distance_precision_pct),
        )
    });
    let mut kept: Vec<CurvePoint> = Vec::new();
    for p in pts {
        if kept
            .last()
            .is_none_or(|l| p.distance_precision_pct < l.distance_precision_pct - 1e-9)
        {
            kept.push(p);
        }
    }
    let mut out = vec![CurvePoint {
        hours: 0.0,
        hours_expected: 0.0,
        distance_precision_pct: f64::NAN,
        epochs: 0,
        goal_asked_pct: f64::NAN,
        gain_pct_per_hour: f64::NAN,
        nights: Vec::new(),
    }];
    out.extend(kept);
    set_gains(&mut out);
    out
}

/// A field's curve (its plan needs its stars, so the goal ladder of
/// [`inverse_curve`] is not walked for it): zero hours, then its own plan's
/// point when that reaches its goal.
pub fn field_curve(settings: &Settings, p: &Prediction, goal_pct: Option<f64>) -> Vec<CurvePoint> {
    let mut out = vec![CurvePoint {
        hours: 0.0,
        hours_expected: 0.0,
        distance_precision_pct: f64::NAN,
        epochs: 0,
        goal_asked_pct: f64::NAN,
        gain_pct_per_hour: f64::NAN,
        nights: Vec::new(),
    }];
    if let Some(g) = goal_pct
        && p.verdict == Verdict::Reachable
        && p.distance_precision_pct.is_finite()
        && !p.epochs.is_empty()
    {
        let clear = super::clear_fraction(settings).0;
        out.push(point(settings, p, g, &clear));
    }
    set_gains(&mut out);
    out
}

/// The best point of a curve within `hours` (clear weather, or as
/// `cost` counts them): the finest precision whose cost fits.
pub fn best_within(
    curve: &[CurvePoint],
    hours: f64,
    cost: impl Fn(&CurvePoint) -> f64,
) -> Option<&CurvePoint> {
    curve
        .iter()
        .filter(|p| p.distance_precision_pct.is_finite() && cost(p) <= hours + 1e-9)
        .min_by(|a, b| {
            a.distance_precision_pct
                .total_cmp(&b.distance_precision_pct)
        })
}
