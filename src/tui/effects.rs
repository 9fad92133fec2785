//! Running [`Effect`]s: the library computes, the result comes back as a [`Msg`].
//! The terminal runner runs the computing jobs on background threads; tests and
//! benchmarks call [`run`] directly.

use crate::astro::night::Night;
use crate::error::Result;
use crate::io::atomic::write_atomic;
use crate::io::targets::Target;
use crate::ladder::parallax::ParallaxMethod;
use crate::ladder::pulsator::{PulsatorConfig, PulsatorMethod};
use crate::ladder::transient::{ChaseOptions, TransientConfig, TransientMethod, night_of};
use crate::photometry::Photometer;
use crate::plan::season::{
    Constraints, NightSky, PreparedPlace, ScanSetup, TargetNightRow, scan_night,
};
use crate::tui::msg::{
    Effect, Msg, NightJob, PlanJob, RecoveryOp, SeasonJob, SeasonRows, SeasonSky,
};
use crate::tui::state::{
    BUDGET_MONTHS, BudgetKey, MethodBody, MethodKey, MethodResult, NightData, PARALLAX_MONTHS,
    PHASE_NIGHTS, SeasonKey, TargetRow, View,
};
use rayon::prelude::*;
use std::sync::Arc;

/// One target's row of the night table.
pub fn target_row(night: &Night, t: &Target, limits: &crate::astro::night::Limits) -> TargetRow {
    let place = t.place();
    let tn = night.target(&place, limits);
    let obs: Vec<_> = night.contexts.iter().map(|c| c.observe(&place)).collect();
    let alt_deg = obs.iter().map(|o| o.alt_rad.to_degrees() as f32).collect();
    let moon_sep_deg = tn
        .max_altitude_time
        .map(|tm| crate::astro::moon_separation_deg(night, &place, tm));
    let caution = crate::astro::first_sun_caution(night, &place);
    TargetRow {
        night: tn,
        moon_sep_deg,
        alt_deg,
        sun_caution: caution,
    }
}

/// The night table for a job.
pub fn night_data(job: &NightJob) -> Result<NightData> {
    let night = Night::new(&job.site, job.date)?;
    let events = night.events();
    let rows = job
        .targets
        .par_iter()
        .map(|t| (t.name.clone(), target_row(&night, t, &job.limits)))
        .collect();
    Ok(NightData {
        generation: job.generation,
        site: job.site.name.clone(),
        date: job.date,
        limits: job.limits,
        events,
        start: night.start,
        end: night.end,
        grid_s: night
            .times
            .iter()
            .map(|t| t.seconds_since(&night.start))
            .collect(),
        sun_alt_deg: night.sun_alt_deg.clone(),
        moon_alt_deg: night.moon_alt_deg.clone(),
        rows,
    })
}

/// The nights of a season strip as the season engine prepares them: one
/// [`NightSky`] per column (every `step_days` from `from`) and the scan setup
/// shared by all of them (`rung::plan::season`, the engine of `rung season`).
pub fn season_sky(site: &crate::astro::site::Site, k: &SeasonKey) -> Result<SeasonSky> {
    let c = season_constraints(&k.limits)?;
    let skies: Vec<NightSky> = (0..k.nights)
        .into_par_iter()
        .map(|i| {
            let d = k.from + chrono::Days::new((i * k.step_days) as u64);
            NightSky::new(site, d, &c)
        })
        .collect::<Result<_>>()?;
    let first = skies.first().ok_or_else(|| {
        crate::error::RungError::invalid("season", "a season strip needs at least one night")
    })?;
    let setup = ScanSetup::new(site, &c, first);
    Ok(SeasonSky { setup, skies })
}

/// The season engine's constraints for the UI's limits (no Moon limit, as the
/// night table has none).
pub fn season_constraints(l: &crate::astro::night::Limits) -> Result<Constraints> {
    Constraints::new(l.min_alt_deg, l.sun_alt_deg, None)
}

/// Season rows for a job: observable hours of the asked targets on every night
/// of the strip, from the season engine's `scan_night` (the nights are prepared
/// once per key with [`season_sky`] and shared by later jobs).
pub fn season_rows(job: &SeasonJob) -> Result<SeasonRows> {
    let k = &job.key;
    let sky = match &job.nights {
        Some(n) => n.clone(),
        None => Arc::new(season_sky(&job.site, k)?),
    };
    let places: Vec<PreparedPlace> = job
        .targets
        .iter()
        .map(|t| PreparedPlace::new(&t.place()))
        .collect();
    let mut hours = vec![Vec::with_capacity(sky.skies.len()); places.len()];
    let mut rows: Vec<TargetNightRow> = Vec::with_capacity(places.len());
    for night in &sky.skies {
        scan_night(&sky.setup, night, &places, &mut rows);
        for (h, r) in hours.iter_mut().zip(&rows) {
            h.push(r.observable_hours);
        }
    }
    let rows = job
        .targets
        .iter()
        .map(|t| t.name.clone())
        .zip(hours)
        .collect();
    Ok(SeasonRows {
        key: k.clone(),
        nights: sky,
        rows,
    })
}

/// The distance-method report for a key: the pulsator's phase analysis over
/// [`PHASE_NIGHTS`] nights from the date, or the transient's chase from the
/// date (not before its discovery) to the method's horizon, with exposures from
/// the chosen instrument's photometer. The same library calls as `rung phase`
/// and `rung chase`.
pub fn method_report(k: &MethodKey) -> MethodBody {
    match method_report_inner(k) {
        Ok(b) => b,
        Err(e) => MethodBody::Failed(e.to_string()),
    }
}

fn method_report_inner(k: &MethodKey) -> Result<MethodBody> {
    use crate::io::targets::Kind;
    use crate::ladder::Setting;
    let t = &k.target;
    let em = Photometer::from_name(&k.instrument, &k.site)?;
    match k.view {
        View::Parallax => {
            if t.kind != Kind::Parallax {
                return Ok(MethodBody::NotApplicable(format!(
                    "{} is a {} target: the Parallax view is for parallax targets (choose one with ↑/↓)",
                    t.name,
                    t.kind.as_str()
                )));
            }
            let m = ParallaxMethod::builtin()?;
            let to = k
                .date
                .checked_add_months(chrono::Months::new(PARALLAX_MONTHS))
                .and_then(|d| d.pred_opt())
                .ok_or_else(|| {
                    crate::error::RungError::invalid("date", "too late for a parallax range")
                })?;
            let s = Setting {
                site: &k.site,
                target: t,
                from: k.date,
                to,
                limits: k.limits,
            };
            Ok(MethodBody::Parallax(Box::new(m.plan(&s, &em)?)))
        }
        View::Phase => {
            if t.kind != Kind::Pulsator {
                return Ok(MethodBody::NotApplicable(format!(
                    "{} is a {} target: the Phase view is for pulsators (choose one with ↑/↓)",
                    t.name,
                    t.kind.as_str()
                )));
            }
            let m = PulsatorMethod::with_config(PulsatorConfig::load()?);
            let s = Setting {
                site: &k.site,
                target: t,
                from: k.date,
                to: k.date + chrono::Days::new(PHASE_NIGHTS - 1),
                limits: k.limits,
            };
            Ok(MethodBody::Phase(Box::new(m.analyse(&s, Some(&em))?)))
        }
        View::Chase => {
            if t.kind != Kind::Transient {
                return Ok(MethodBody::NotApplicable(format!(
                    "{} is a {} target: the Chase view is for transients (choose one with ↑/↓)",
                    t.name,
                    t.kind.as_str()
                )));
            }
            let cfg = TransientConfig::embedded()?;
            let disc = t.discovered.ok_or_else(|| {
                crate::error::RungError::invalid("target", "a transient needs its discovery time")
            })?;
            let first = night_of(&k.site, disc);
            let to = first + chrono::Days::new(cfg.planning.horizon_days as u64);
            let noon = crate::astro::night::local_noon(&k.site, k.date)?;
            let now = if noon.seconds_since(&disc) > 0.0 {
                noon
            } else {
                disc
            };
            let from = night_of(&k.site, now).max(first);
            if from > to {
                return Ok(MethodBody::NotApplicable(format!(
                    "{} is past its {}-day follow-up horizon on {} (discovered {})",
                    t.name,
                    cfg.planning.horizon_days,
                    k.date,
                    disc.iso()
                )));
            }
            let m = TransientMethod::with(
                cfg,
                ChaseOptions {
                    now: Some(now),
                    ..ChaseOptions::default()
                },
            );
            let s = Setting {
                site: &k.site,
                target: t,
                from,
                to,
                limits: k.limits,
            };
            Ok(MethodBody::Chase(Box::new(m.chase(&s, &em, t.goal_pct)?)))
        }
        _ => Ok(MethodBody::NotApplicable("no report for this view".into())),
    }
}

/// The programme's budget over [`BUDGET_MONTHS`] months from the date: each
/// target's goal through its method's `goal` (the same `plan::budget::budget`
/// as `rung budget`), exposures from the chosen instrument.
pub fn budget_for(k: &BudgetKey) -> Result<crate::plan::budget::Budget> {
    // The last few budgets are kept: reopening the same programme, or going
    // back to a month already seen, costs nothing.
    use std::sync::{Mutex, OnceLock};
    type Memo = Mutex<Vec<(BudgetKey, crate::plan::budget::Budget)>>;
    static MEMO: OnceLock<Memo> = OnceLock::new();
    let memo = MEMO.get_or_init(|| Mutex::new(Vec::new()));
    if let Ok(m) = memo.lock()
        && let Some((_, b)) = m.iter().find(|(key, _)| key == k)
    {
        return Ok(b.clone());
    }
    let b = budget_uncached(k)?;
    if let Ok(mut m) = memo.lock() {
        if m.len() >= 8 {
            m.remove(0);
        }
        m.push((k.clone(), b.clone()));
    }
    Ok(b)
}

fn budget_uncached(k: &BudgetKey) -> Result<crate::plan::budget::Budget> {
    let em = Photometer::from_name(&k.instrument, &k.site)?;
    let plx = ParallaxMethod::builtin()?;
    let pul = PulsatorMethod::with_config(PulsatorConfig::load()?);
    let tra = TransientMethod::new()?;
    let methods: [&dyn crate::ladder::Method; 3] = [&plx, &pul, &tra];
    let to = k
        .date
        .checked_add_months(chrono::Months::new(BUDGET_MONTHS))
        .and_then(|d| d.pred_opt())
        .ok_or_else(|| crate::error::RungError::invalid("date", "too late for a budget range"))?;
    crate::plan::budget::budget(
        &k.site, &k.targets, &methods, &em, k.date, to, k.limits, None,
    )
}

/// The files of a plan export, named after the site and span.
pub fn plan_paths(job: &PlanJob) -> [std::path::PathBuf; 4] {
    let stem = format!("plan-{}-{}-to-{}", job.site.name, job.from, job.to);
    [
        job.dir.join(format!("{stem}.json")),
        job.dir.join(format!("{stem}.csv")),
        job.dir.join(format!("{stem}.ics")),
        job.dir
            .join(format!("night-{}-{}.md", job.site.name, job.sheet_night)),
    ]
}

/// Schedule the job's span (`plan::schedule::schedule` with
/// `ladder::methods()` and the instrument's photometer, as `rung plan` does)
/// and write, atomically, the plan file (`plan::file::save`), the visits as CSV
/// (`plan::export::visits_csv`), as iCalendar (`plan::export::ics`) and the
/// night sheet of `sheet_night` (`plan::export::night_sheet`). Returns the
/// files written.
pub fn export_plan(job: &PlanJob) -> Result<Vec<std::path::PathBuf>> {
    use crate::plan::export;
    use crate::plan::file::{self, FORMAT, PlanFile};
    use crate::plan::schedule::{self, Request, fingerprint};
    let em = Photometer::from_name(&job.instrument, &job.site)?;
    let owned = crate::ladder::methods()?;
    let ms: Vec<&dyn crate::ladder::Method> = owned.iter().map(|m| m.as_ref()).collect();
    let req = Request {
        site: &job.site,
        targets: &job.targets,
        from: job.from,
        to: job.to,
        limits: job.limits,
        hours_per_night: job.hours_per_night,
        methods: &ms,
        em: &em,
        done: vec![],
        lost_nights: Default::default(),
    };
    let sch = schedule::schedule(&req)?;
    let plan = PlanFile {
        format: FORMAT.into(),
        site: job.site_spec.clone(),
        targets_file: job.targets_file.clone(),
        targets_fingerprint: fingerprint(&job.targets),
        from: job.from,
        to: job.to,
        hours_per_night: job.hours_per_night,
        min_alt_deg: job.limits.min_alt_deg,
        sun_alt_deg: job.limits.sun_alt_deg,
        lost_nights: Default::default(),
        visits: sch.visits,
    };
    let [json, csv, ics, sheet] = plan_paths(job);
    std::fs::create_dir_all(&job.dir).map_err(|e| crate::error::RungError::Io {
        path: job.dir.clone(),
        source: e,
    })?;
    file::save(&plan, &json)?;
    write_atomic(&csv, export::visits_csv(&plan.visits, &job.site).as_bytes())?;
    write_atomic(
        &ics,
        export::ics(&plan.visits, &job.site, job.stamp).as_bytes(),
    )?;
    let header = format!(
        "Plan {} to {}, {:.1} h per night, window above {:.0}° with the Sun below {:.0}°.",
        plan.from, plan.to, plan.hours_per_night, plan.min_alt_deg, plan.sun_alt_deg
    );
    write_atomic(
        &sheet,
        export::night_sheet(&plan.visits, &job.site, job.sheet_night, &header).as_bytes(),
    )?;
    Ok(vec![json, csv, ics, sheet])
}

/// Save: keep the original once as a backup, then write the programme atomically.
pub fn save(
    path: &std::path::Path,
    text: &str,
    backup: Option<&(std::path::PathBuf, Vec<u8>)>,
) -> std::result::Result<std::path::PathBuf, String> {
    if let Some(dir) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir)
            .map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    }
    if let Some((bp, bytes)) = backup {
        write_atomic(bp, bytes).map_err(|e| e.to_string())?;
    }
    write_atomic(path, text.as_bytes()).map_err(|e| e.to_string())?;
    Ok(path.to_path_buf())
}

/// Keep, remove or set aside the unsaved-edits file (see [`RecoveryOp`]).
/// A file that is already absent counts as removed.
pub fn keep_recovery(path: &std::path::Path, op: &RecoveryOp) -> std::result::Result<(), String> {
    let (r, what) = match op {
        RecoveryOp::Keep(text) => return save(path, text, None).map(|_| ()),
        RecoveryOp::Remove => (std::fs::remove_file(path), "remove"),
        RecoveryOp::SetAside => (
            std::fs::rename(path, crate::tui::state::declined_recovery_path(path)),
            "set aside",
        ),
    };
    match r {
        Err(e) if e.kind() != std::io::ErrorKind::NotFound => {
            Err(format!("cannot {what} {}: {e}", path.display()))
        }
        _ => Ok(()),
    }
}

/// Run an effect to completion here and return the messages it produces.
pub fn run(effect: Effect) -> Vec<Msg> {
    match effect {
        Effect::Night(job) => vec![match night_data(&job) {
            Ok(d) => Msg::NightReady(Box::new(d)),
            Err(e) => Msg::NightFailed(e.to_string()),
        }],
        Effect::Season(job) => vec![match season_rows(&job) {
            Ok(r) => Msg::SeasonReady(Box::new(r)),
            Err(e) => Msg::SeasonFailed(job.key.clone(), e.to_string()),
        }],
        Effect::Method(k) => {
            let body = method_report(&k);
            vec![Msg::MethodReady(Box::new(MethodResult { key: *k, body }))]
        }
        Effect::Budget(k) => {
            let r = budget_for(&k).map(Box::new).map_err(|e| e.to_string());
            vec![Msg::BudgetReady(k, r)]
        }
        Effect::Export(files) => {
            let mut done = Vec::new();
            let mut err = None;
            for (p, text) in files {
                match save(&p, &text, None) {
                    Ok(p) => done.push(p),
                    Err(e) => {
                        err = Some(e);
                        break;
                    }
                }
            }
            vec![Msg::Exported(match err {
                Some(e) => Err(e),
                None => Ok(done),
            })]
        }
        Effect::ExportPlan(job) => vec![Msg::Exported(
            export_plan(&job).map_err(|e| format!("plan not exported: {e}")),
        )],
        Effect::Save { path, text, backup } => {
            vec![Msg::Saved(save(&path, &text, backup.as_ref()))]
        }
        Effect::Recovery { path, op } => vec![Msg::RecoveryKept(keep_recovery(&path, &op))],
        Effect::Batch(list) => list.into_iter().flat_map(run).collect(),
    }
}

/// Feed a message to `update`, run every effect it causes here, and feed the
/// results back until nothing is left (what the runner does, without threads).
pub fn settle(state: &mut crate::tui::state::State, msg: Msg) {
    let mut queue = vec![msg];
    while let Some(m) = queue.pop() {
        if let Some(e) = crate::tui::update::update(state, m) {
            let mut out = run(e);
            out.reverse();
            queue.extend(out);
        }
    }
}

/// Open the UI state and compute everything it first needs, here (tests, benchmarks).
pub fn open(setup: crate::tui::update::Setup) -> crate::tui::state::State {
    let (mut s, e) = crate::tui::update::init(setup);
    let mut queue: Vec<Msg> = e.map(run).unwrap_or_default();
    queue.reverse();
    while let Some(m) = queue.pop() {
        if let Some(e) = crate::tui::update::update(&mut s, m) {
            let mut out = run(e);
            out.reverse();
            queue.extend(out);
        }
    }
    s
}
