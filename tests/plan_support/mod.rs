//! What the scheduler's tests share (plan_schedule, plan_replan,
//! plan_covered): the test photometry, dates, a method's setting, and one call of the scheduler
//! at the demo site with the test's methods; and the check of the fill's
//! `predict_each_extra` against `predict` (parallax_plan, pulsator_plan).
//!
//! Each test file includes it with `mod plan_support;`; not every file uses
//! every item.
#![allow(dead_code)]

use chrono::NaiveDate;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::Limits;
use rung::astro::site::Site;
use rung::astro::time::Instant;
use rung::io::sites::resolve;
use rung::io::targets::Target;
use rung::ladder::{ExposureModel, MethodSet, Setting};
use rung::plan::schedule::{Request, Schedule, Visit, schedule};
use std::collections::BTreeSet;

/// Test photometry: SNR 100 from 300 s in one exposure, fixed overheads.
pub struct FixedPhot;
impl ExposureModel for FixedPhot {
    fn snr(&self, _m: f64, _b: &str, t: f64, _c: &Context, _p: &CatalogPlace) -> rung::Result<f64> {
        Ok(100.0 * (t / 300.0).sqrt())
    }
    fn exptime(
        &self,
        _m: f64,
        _b: &str,
        _s: f64,
        _c: &Context,
        _p: &CatalogPlace,
    ) -> rung::Result<(f64, u32)> {
        Ok((300.0, 1))
    }
    fn visit_overhead_s(&self) -> f64 {
        120.0
    }
    fn readout_s(&self) -> f64 {
        10.0
    }
    fn seeing_fwhm_arcsec(&self) -> f64 {
        1.2
    }
}

/// A date from `YYYY-MM-DD`.
pub fn day(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

/// A method's setting for `target` at `site` over the nights `from`..=`to`,
/// above 30° with the Sun below −12° (the limits of [`Job`]).
pub fn setting<'a>(site: &'a Site, target: &'a Target, from: &str, to: &str) -> Setting<'a> {
    Setting {
        site,
        target,
        from: day(from),
        to: day(to),
        limits: Limits::new(30.0, -12.0).unwrap(),
    }
}

/// One scheduling job: the nights `from`..=`to` (the methods plan to `to`
/// as well), above 30° with the Sun below −12°, with [`FixedPhot`].
pub struct Job<'a> {
    pub targets: &'a [Target],
    pub methods: &'a MethodSet,
    pub from: &'a str,
    pub to: &'a str,
    pub hours: f64,
    pub done: Vec<Visit>,
    pub lost: BTreeSet<NaiveDate>,
    pub not_before: Option<Instant>,
}

impl<'a> Job<'a> {
    /// A job with nothing done, no night lost and no clock.
    pub fn new(
        targets: &'a [Target],
        methods: &'a MethodSet,
        from: &'a str,
        to: &'a str,
        hours: f64,
    ) -> Self {
        Job {
            targets,
            methods,
            from,
            to,
            hours,
            done: Vec::new(),
            lost: BTreeSet::new(),
            not_before: None,
        }
    }

    /// The schedule at the demo site (pampa-lucero).
    pub fn run(self) -> rung::Result<Schedule> {
        let site = resolve("pampa-lucero").unwrap();
        let fields = rung::ladder::field::FieldConfig::builtin();
        let req = Request {
            site: &site,
            targets: self.targets,
            from: day(self.from),
            to: day(self.to),
            limits: Limits::new(30.0, -12.0).unwrap(),
            hours_per_night: self.hours,
            methods: self.methods,
            em: &FixedPhot,
            goal_pct: None,
            done: self.done,
            lost_nights: self.lost,
            horizon_to: day(self.to),
            not_before: self.not_before,
            fields: &fields,
        };
        schedule(&req)
    }
}

/// `Method::predict_each_extra` must give, for every extra epoch, what
/// `predict` gives for the base followed by that epoch (one call each,
/// `rung::ladder::predict_each_by_one`), to the last bit: the same JSON of
/// each prediction, the same message of each refusal.
pub fn assert_each_extra_as_predict(
    m: &dyn rung::ladder::Method,
    s: &rung::ladder::Setting,
    em: &dyn ExposureModel,
    base: &[rung::ladder::Epoch],
    extra: &[rung::ladder::Epoch],
) {
    let each = m.predict_each_extra(s, em, base, extra);
    assert_eq!(each.len(), extra.len());
    let one_by_one = rung::ladder::predict_each_by_one(m, s, em, base, extra);
    for (got, want) in each.into_iter().zip(one_by_one) {
        assert_same_answer(got, want);
    }
    // `predict_then_each_extra`: the base's `predict`, then each extra the
    // closure gives (which sees the base's prediction), as above.
    let mut seen = None;
    let (p0, each) = m.predict_then_each_extra(s, em, base, &mut |p| {
        seen = Some(serde_json::to_string(p).unwrap());
        extra.to_vec()
    });
    let want0 = m.predict(s, em, base);
    match (&p0, &want0) {
        (Ok(a), Ok(_)) => assert_eq!(seen, Some(serde_json::to_string(a).unwrap())),
        _ => assert!(seen.is_none()),
    }
    let one_by_one = base_same_then_one_by_one(m, s, em, base, extra, p0, want0);
    assert_eq!(each.len(), one_by_one.len());
    for (got, want) in each.into_iter().zip(one_by_one) {
        assert_same_answer(got, want);
    }
}

/// `Method::rank_then_each_extra` (the scheduler's fill) must give the
/// base's `predict` to the last bit, and for every extra epoch `predict`'s
/// answer for the base followed by it: the same refusal, or a precision
/// within `rel` of it (a method may rank a candidate at its night's
/// interpolated context, which src/astro/frames.rs's
/// night_frame_matches_exact_context holds to 0.05 arcsec of the exact one).
pub fn assert_ranked_extra_near_predict(
    m: &dyn rung::ladder::Method,
    s: &rung::ladder::Setting,
    em: &dyn ExposureModel,
    base: &[rung::ladder::Epoch],
    extra: &[rung::ladder::Epoch],
    rel: f64,
) {
    let (p0, each) = m.rank_then_each_extra(s, em, base, &mut |_| extra.to_vec());
    let want0 = m.predict(s, em, base);
    let one_by_one = base_same_then_one_by_one(m, s, em, base, extra, p0, want0);
    assert_eq!(each.len(), one_by_one.len());
    for (got, want) in each.into_iter().zip(one_by_one) {
        match (got, want) {
            (Ok(a), Ok(b)) => {
                let (x, y) = (a.distance_precision_pct, b.distance_precision_pct);
                assert!(
                    x == y || (x - y).abs() <= rel * y.abs(),
                    "ranked {x} against predict's {y}"
                );
                assert_eq!(a.epochs.len(), b.epochs.len());
            }
            (Err(a), Err(b)) => assert_eq!(a.to_string(), b.to_string()),
            (a, b) => panic!("{a:?} vs {b:?}"),
        }
    }
}

/// The fill's base answer `p0` must be `predict`'s `want0` (the same JSON
/// or the same refusal); then what `predict` gives for the base followed by
/// each extra epoch, one call each (none when the base is refused).
fn base_same_then_one_by_one(
    m: &dyn rung::ladder::Method,
    s: &rung::ladder::Setting,
    em: &dyn ExposureModel,
    base: &[rung::ladder::Epoch],
    extra: &[rung::ladder::Epoch],
    p0: rung::error::Result<rung::ladder::Prediction>,
    want0: rung::error::Result<rung::ladder::Prediction>,
) -> Vec<rung::error::Result<rung::ladder::Prediction>> {
    let one_by_one = if want0.is_ok() {
        rung::ladder::predict_each_by_one(m, s, em, base, extra)
    } else {
        Vec::new()
    };
    assert_same_answer(p0, want0);
    one_by_one
}

/// The same prediction (the same JSON) or the same refusal (the same message).
fn assert_same_answer(
    got: rung::error::Result<rung::ladder::Prediction>,
    want: rung::error::Result<rung::ladder::Prediction>,
) {
    match (got, want) {
        (Ok(a), Ok(b)) => assert_eq!(
            serde_json::to_string(&a).unwrap(),
            serde_json::to_string(&b).unwrap()
        ),
        (Err(a), Err(b)) => assert_eq!(a.to_string(), b.to_string()),
        (a, b) => panic!("{a:?} vs {b:?}"),
    }
}
