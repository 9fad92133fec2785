//! Running [`Effect`]s: the library computes, the result comes back as a [`Msg`].
//! The terminal runner runs the computing jobs on background threads; tests and
//! benchmarks call [`run`] directly.

use crate::astro::night::Night;
use crate::error::Result;
use crate::io::atomic::write_atomic;
use crate::io::targets::Target;
use crate::plan::season::{
    Constraints, NightSky, PreparedPlace, ScanSetup, TargetNightRow, scan_night,
};
pub use crate::tui::jobs::Cancel;
use crate::tui::msg::{
    Effect, Msg, NightJob, PlanJob, RecoveryOp, SaveJob, Saved, SeasonJob, SeasonRows,
};
use crate::tui::state::{
    BudgetKey, MethodBody, MethodKey, MethodResult, NightData, SeasonKey, SeasonSky, View,
};
use rayon::prelude::*;
use std::sync::Arc;

/// The night table for a job.
pub fn night_data(job: &NightJob) -> Result<NightData> {
    let night = Night::new(&job.site, job.date)?;
    let events = night.events();
    let places: Vec<_> = job.targets.iter().map(|t| t.place()).collect();
    let table = crate::plan::night_table::rows(&night, &places, &job.limits);
    let tracks = job
        .targets
        .par_iter()
        .zip(&places)
        .map(|(t, p)| {
            (
                t.name.clone(),
                crate::plan::night_table::altitude_track(&night, p),
            )
        })
        .collect();
    let rows = job
        .targets
        .iter()
        .map(|t| t.name.clone())
        .zip(table)
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
        moon_alt_deg: night.moon_alt_deg().to_vec(),
        rows,
        tracks,
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

/// The distance-method report for a key: the same library calls, with the
/// same settings, as `rung parallax`, `rung phase` and `rung chase`
/// ([`crate::programme::report`]).
pub fn method_report(k: &MethodKey) -> MethodBody {
    let kind = match k.view {
        View::Parallax => crate::io::targets::Kind::Parallax,
        View::Phase => crate::io::targets::Kind::Pulsator,
        View::Chase => crate::io::targets::Kind::Transient,
        _ => return MethodBody::NotApplicable("no report for this view".into()),
    };
    let t = &k.target;
    // A field, or a star of one, in the Phase view: the field as one unit
    // (the same call as `rung phase --field`).
    if !k.field.is_empty() {
        let links = crate::ladder::field::link(&k.field);
        return match links.by_name(&k.field, &k.field[0].name) {
            Some(g) => match k.settings.field_report(&k.field, g) {
                Ok(mut r) => {
                    // Beside it, the distance on the anchors' zero point
                    // (`rung ladder`'s), as `rung phase --field` shows it.
                    if !k.programme.is_empty() {
                        crate::ladder::chain::anchor_field(
                            &k.settings,
                            &mut r,
                            &k.programme,
                            k.file.as_deref(),
                        );
                    }
                    MethodBody::Field(Box::new(r))
                }
                Err(e) => MethodBody::Failed(e.to_string()),
            },
            None => MethodBody::Failed(format!("{} is not a field", k.field[0].name)),
        };
    }
    if t.kind != kind {
        let what = match k.view {
            View::Parallax => "the Parallax view is for parallax targets",
            View::Phase => "the Phase view is for pulsators",
            _ => "the Chase view is for transients",
        };
        return MethodBody::NotApplicable(format!(
            "{} is a {} target: {what} (choose one with ↑/↓)",
            t.name,
            t.kind.as_str()
        ));
    }
    // A calibrator already observed: its calibration from the ladder, as
    // `rung chase` gives it.
    if k.view == View::Chase
        && !t.host.is_empty()
        && t.peak_err_mag.is_some()
        && !k.programme.is_empty()
    {
        let f = k.file.as_deref();
        let row = crate::ladder::chain::host_distance(&k.settings, &k.programme, f, t)
            .and_then(|_| crate::ladder::chain::build(&k.settings, &k.programme, f))
            .map(|l| {
                crate::ladder::chain::calibrators_of(&l)
                    .into_iter()
                    .find(|r| r.target == t.name)
                    .ok_or_else(|| {
                        l.left_out
                            .iter()
                            .find(|(n, _)| n == &t.name)
                            .map_or("it is not on the ladder".to_string(), |(_, w)| w.clone())
                    })
            });
        return match row {
            Ok(Ok(r)) => MethodBody::Calibrated(Box::new(r)),
            Ok(Err(why)) => MethodBody::Failed(format!("{}: no calibration: {why}", t.name)),
            Err(e) => MethodBody::Failed(e.to_string()),
        };
    }
    // A transient whose host names a field: its host's planned distance, as
    // `rung chase` and the ladder take it (`ladder::chain::host_distance`).
    let resolved;
    let t = if k.view == View::Chase && !t.host.is_empty() && !k.programme.is_empty() {
        match crate::ladder::chain::host_distance(&k.settings, &k.programme, k.file.as_deref(), t) {
            Ok(Some(h)) => {
                let mut v = t.clone();
                v.host_mu_mag = Some(h.modulus_mag);
                v.host_mu_err_mag = Some(h.sigma_mag);
                resolved = v;
                &resolved
            }
            Ok(None) => t,
            Err(e) => return MethodBody::Failed(e.to_string()),
        }
    } else {
        t
    };
    match crate::programme::report(&k.settings, t) {
        Ok(crate::programme::Report::Parallax(p)) => MethodBody::Parallax(p),
        Ok(crate::programme::Report::Phase(p)) => MethodBody::Phase(p),
        Ok(crate::programme::Report::Chase(c)) => MethodBody::Chase(c),
        Ok(crate::programme::Report::Other(_)) => {
            MethodBody::NotApplicable("this method has no view of its own".into())
        }
        Err(e) => MethodBody::Failed(e.to_string()),
    }
}

/// Build the nights of `job` into the library's shared cache
/// ([`Night::shared`], the nights the budget's methods ask for), one after
/// another on this thread, not on the pool: the night table's work, on the
/// pool, does not queue behind them. From the last night back: the budget's
/// methods walk their nights forward, so they meet these once, instead of
/// taking turns night by night. Stops once `cancel` is set, or at a night
/// that cannot be built (the budget says why).
pub fn build_nights(job: &crate::tui::state::NightsJob, cancel: &Cancel) {
    let mut d = job.to;
    while d >= job.from && !cancel.is_cancelled() {
        if Night::shared(&job.site, d).is_err() {
            return;
        }
        match d.pred_opt() {
            Some(p) => d = p,
            None => return,
        }
    }
}

/// The programme's distance ladder with the key's settings, as `rung
/// ladder` gives it (`ladder::chain::report`, the default end point).
pub fn ladder_for(k: &BudgetKey) -> Result<crate::ladder::chain::LadderReport> {
    crate::ladder::chain::report(&k.settings, &k.targets, k.file.as_deref(), None)
}

/// The programme's budget over its range (`plan::budget` with the key's
/// settings, hours asked and curves, as `rung budget`). Each target's
/// prediction and curve are kept, per target and settings: an edit
/// recomputes only the targets it changed, going back to settings already
/// seen costs nothing, and asking other hours only shares them again.
pub fn budget_for(k: &BudgetKey) -> Result<crate::plan::budget::Budget> {
    budget_until(k, &Cancel::default()).map(|b| b.expect("never cancelled"))
}

/// [`budget_for`], stopping between targets once `cancel` is set (a newer
/// budget superseded it): `None` then. The targets already computed are kept
/// for the next budget with the same settings.
pub fn budget_until(k: &BudgetKey, cancel: &Cancel) -> Result<Option<crate::plan::budget::Budget>> {
    budget_streaming(k, cancel, &mut |_| {})
}

/// A target's prediction, as the budget keeps it.
type Pred = Option<std::result::Result<crate::ladder::Prediction, String>>;
/// A target's prediction and, once computed, its curve.
type BudgetRowWork = (Pred, Option<Vec<crate::plan::budget::CurvePoint>>);
/// The memo of [`budget_streaming`]: per settings (the newest
/// [`BUDGET_MEMO_KEEP`]), per target name, the targets of that name and their rows.
type BudgetMemo = std::sync::Mutex<
    Vec<(
        Arc<crate::programme::Settings>,
        std::collections::HashMap<String, Vec<(Target, BudgetRowWork)>>,
    )>,
>;
/// Settings whose predictions are kept (the newest).
const BUDGET_MEMO_KEEP: usize = 4;
static BUDGET_MEMO: std::sync::OnceLock<BudgetMemo> = std::sync::OnceLock::new();

/// Forget every target's prediction and curve kept by the budget (the next
/// budget computes all of them again): for benchmarks of the cold wait.
pub fn clear_budget_memo() {
    if let Some(m) = BUDGET_MEMO.get() {
        m.lock().unwrap_or_else(|e| e.into_inner()).clear();
    }
}

/// How many targets a budget computes in one batch after the rows on
/// screen (a newer budget stops it between batches; each target's figures
/// go out as it ends): small enough to stop soon, large enough to keep
/// every core busy (two targets a core).
fn budget_chunk() -> usize {
    (2 * rayon::current_num_threads()).max(8)
}

/// Most threads that drive the rows on screen (one target each at a time).
const LEAD_THREADS: usize = 32;

/// [`budget_until`], handing each target's figures to `partial` as soon as
/// they are computed ([`Msg::BudgetPartial`], one message a target): the
/// rows on screen ([`BudgetKey::first_shown`] of [`BudgetKey::first`]) as
/// the first batch, then the rest of `first`, then the others in programme
/// order, a few at a time.
pub fn budget_streaming(
    k: &BudgetKey,
    cancel: &Cancel,
    partial: &mut dyn FnMut(Msg),
) -> Result<Option<crate::plan::budget::Budget>> {
    use crate::plan::budget::{
        Options, TargetWork, assemble_with, curve::inverse_curve, target_prediction,
    };
    k.settings.nights()?;
    if let Some(a) = &k.asked {
        a.check()?;
        a.check_semesters(&k.settings)?;
    }
    let curves = k.curves || k.asked.is_some();
    let memo = BUDGET_MEMO.get_or_init(|| std::sync::Mutex::new(Vec::new()));
    let find = |m: &[(Arc<crate::programme::Settings>, _)]| {
        m.iter()
            .position(|(s, _)| crate::tui::state::same_settings(s, &k.settings))
    };
    let mut rows: Vec<Option<BudgetRowWork>> = match memo.lock() {
        Ok(m) => match find(&m) {
            Some(i) => k
                .targets
                .iter()
                .map(|t| {
                    m[i].1
                        .get(&t.name)
                        .and_then(|v| v.iter().find(|(mt, _)| mt == t))
                        .map(|x| x.1.clone())
                })
                .collect(),
            None => vec![None; k.targets.len()],
        },
        Err(_) => vec![None; k.targets.len()],
    };
    // A field is one unit (its plan needs its stars, so it is not kept per
    // target): its row from its plan, its stars none (plan::budget::list_prediction).
    let links = crate::ladder::field::link(&k.targets);
    let alone = |i: usize| matches!(links.role(i), crate::ladder::field::Role::Alone);
    // What is known already goes to the table at once.
    let known: Vec<usize> = (0..k.targets.len())
        .filter(|&i| alone(i) && rows[i].is_some())
        .collect();
    send_partial(k, &known, &rows, partial);
    // The rows on screen first, then the rest in order; each once.
    let mut seen = vec![false; k.targets.len()];
    let mut todo = Vec::with_capacity(k.targets.len());
    // How many of `todo` are rows on screen: the first batch.
    let mut lead = 0;
    for (n, &i) in k
        .first
        .iter()
        .chain(&(0..k.targets.len()).collect::<Vec<_>>())
        .enumerate()
    {
        if i < k.targets.len() && !seen[i] {
            seen[i] = true;
            let needs_curve = curves && alone(i) && matches!(&rows[i], Some((Some(Ok(_)), None)));
            if rows[i].is_none() || needs_curve || !alone(i) {
                todo.push(i);
                if n < k.first_shown.min(k.first.len()) {
                    lead = todo.len();
                }
            }
        }
    }
    // One target's row, from what the memo held of it (`had`).
    let one = |i: usize, had: Option<BudgetRowWork>| -> Option<BudgetRowWork> {
        let t = &k.targets[i];
        if !alone(i) {
            return (!cancel.is_cancelled()).then(|| {
                (
                    crate::plan::budget::list_prediction(&k.settings, &k.targets, &links, i),
                    None,
                )
            });
        }
        let (pred, curve) = match had {
            Some(x) => x,
            None if cancel.is_cancelled() => return None,
            None => (target_prediction(&k.settings, t), None),
        };
        let curve = match (curve, &pred) {
            (Some(c), _) => Some(c),
            (None, Some(Ok(p))) if curves => {
                if cancel.is_cancelled() {
                    return None;
                }
                Some(inverse_curve(&k.settings, t, Some(p)))
            }
            _ => None,
        };
        Some((pred, curve))
    };
    let chunk_len = budget_chunk();
    let mut done = 0;
    while done < todo.len() {
        if cancel.is_cancelled() {
            return Ok(None);
        }
        // The rows on screen are one batch (the screen is full when it
        // ends), the others a few at a time.
        let n = match lead {
            l if done < l => l - done,
            _ => chunk_len,
        }
        .min(todo.len() - done);
        let chunk = &todo[done..done + n];
        let is_lead = done < lead;
        done += n;
        // Each target of the batch on the pool; its figures handed on as
        // soon as it is done (the table fills row by row).
        let mut got: Vec<(usize, Option<BudgetRowWork>)> = Vec::with_capacity(n);
        if rayon::current_thread_index().is_some() {
            // On the pool itself (waiting here would hold a worker): the
            // batch in parallel, its figures when it ends.
            got = chunk
                .par_iter()
                .map(|&i| (i, one(i, rows[i].clone())))
                .collect();
            for (i, r) in &got {
                if let Some(x) = r.as_ref().filter(|_| alone(*i)) {
                    send_one(k, *i, x, partial);
                }
            }
        } else if is_lead {
            // The rows on screen: each target driven by a thread of its
            // own (its parallel parts still on the pool), so that no
            // target's serial part waits on a pool worker's stack behind
            // another target's, and every core stays busy to the batch's
            // end (on the pool, the last rows came one at a time while a
            // worker slept).
            let (tx, rx) = std::sync::mpsc::channel();
            let next = std::sync::atomic::AtomicUsize::new(0);
            let (one, rows) = (&one, &rows);
            let work = |tx: std::sync::mpsc::Sender<(usize, Option<BudgetRowWork>)>| loop {
                let j = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                let Some(&i) = chunk.get(j) else {
                    break;
                };
                if tx.send((i, one(i, rows[i].clone()))).is_err() {
                    break;
                }
            };
            std::thread::scope(|sc| {
                let mut started = 0;
                for _ in 0..n.min(LEAD_THREADS) {
                    let tx = tx.clone();
                    let work = &work;
                    if std::thread::Builder::new()
                        .spawn_scoped(sc, move || work(tx))
                        .is_ok()
                    {
                        started += 1;
                    }
                }
                if started == 0 {
                    // No thread to be had: the batch here, in order.
                    work(tx.clone());
                }
                drop(tx);
                for (i, r) in rx {
                    if let Some(x) = r.as_ref().filter(|_| alone(i)) {
                        send_one(k, i, x, partial);
                    }
                    got.push((i, r));
                }
            });
        } else {
            let (tx, rx) = std::sync::mpsc::channel();
            let one = &one;
            rayon::in_place_scope(|sc| {
                for &i in chunk {
                    let (tx, had) = (tx.clone(), rows[i].clone());
                    sc.spawn(move |_| {
                        let _ = tx.send((i, one(i, had)));
                    });
                }
                drop(tx);
                for (i, r) in rx {
                    if let Some(x) = r.as_ref().filter(|_| alone(i)) {
                        send_one(k, i, x, partial);
                    }
                    got.push((i, r));
                }
            });
        }
        let mut fresh = Vec::with_capacity(got.len());
        for (i, r) in got {
            if r.is_some() && alone(i) {
                fresh.push(i);
            }
            rows[i] = r;
        }
        keep_in_memo(memo, k, &fresh, &rows);
    }
    let Some(rows) = rows.into_iter().collect::<Option<Vec<BudgetRowWork>>>() else {
        return Ok(None);
    };
    if cancel.is_cancelled() {
        return Ok(None);
    }
    let work = rows
        .into_iter()
        .map(|(pred, curve)| {
            pred.map(|r| {
                r.map(|p| TargetWork {
                    prediction: p,
                    curve: curve.unwrap_or_default(),
                })
            })
        })
        .collect();
    assemble_with(
        &k.settings,
        &k.targets,
        work,
        &Options {
            curves,
            asked: k.asked.clone(),
            confidence: None,
        },
    )
    .map(Some)
}

/// Keep the rows of the targets `fresh` (indices into `k.targets`, each
/// alone, not in a field) in the memo of `k`'s settings.
fn keep_in_memo(memo: &BudgetMemo, k: &BudgetKey, fresh: &[usize], rows: &[Option<BudgetRowWork>]) {
    if fresh.is_empty() {
        return;
    }
    let Ok(mut m) = memo.lock() else {
        return;
    };
    let i = match m
        .iter()
        .position(|(s, _)| crate::tui::state::same_settings(s, &k.settings))
    {
        Some(i) => i,
        None => {
            if m.len() >= BUDGET_MEMO_KEEP {
                m.remove(0);
            }
            m.push((k.settings.clone(), std::collections::HashMap::new()));
            m.len() - 1
        }
    };
    let kept = &mut m[i].1;
    for &j in fresh {
        let (Some(r), t) = (&rows[j], &k.targets[j]) else {
            continue;
        };
        let v = kept.entry(t.name.clone()).or_default();
        match v.iter_mut().find(|(mt, _)| mt == t) {
            Some(slot) if slot.1.1.is_none() => slot.1 = r.clone(),
            Some(_) => {}
            None => v.push((t.clone(), r.clone())),
        }
    }
}

/// Hand the figures of the targets `idx` to `partial` as one
/// [`Msg::BudgetPartial`]: per target, what the budget's row will say of it
/// (the method's σd/d and verdict, or why it has none).
fn send_partial(
    k: &BudgetKey,
    idx: &[usize],
    rows: &[Option<BudgetRowWork>],
    partial: &mut dyn FnMut(Msg),
) {
    let figures: Vec<(Target, crate::tui::state::PartialFigure)> = idx
        .iter()
        .filter_map(|&i| {
            let (pred, _) = rows[i].as_ref()?;
            let f = match pred.as_ref()? {
                Ok(p) => Ok((p.distance_precision_pct, p.verdict.clone())),
                Err(e) => Err(e.clone()),
            };
            Some((k.targets[i].clone(), f))
        })
        .collect();
    if !figures.is_empty() {
        partial(Msg::BudgetPartial(k.settings.clone(), figures));
    }
}

/// Hand the figures of the target at `i` (its row `r`) to `partial` as
/// one [`Msg::BudgetPartial`], as [`send_partial`] does.
fn send_one(k: &BudgetKey, i: usize, r: &BudgetRowWork, partial: &mut dyn FnMut(Msg)) {
    let f = match r.0.as_ref() {
        Some(Ok(p)) => Ok((p.distance_precision_pct, p.verdict.clone())),
        Some(Err(e)) => Err(e.clone()),
        None => return,
    };
    partial(Msg::BudgetPartial(
        k.settings.clone(),
        vec![(k.targets[i].clone(), f)],
    ));
}

/// The budget of `k` with every target's curve ([`budget_for`]) written as
/// CSV, Markdown, LaTeX, the figure (SVG and PNG) and the justification into `dir`
/// (made when missing), each file atomically; the files written, in full.
pub fn budget_files(
    k: &BudgetKey,
    dir: &std::path::Path,
    stem: &str,
) -> std::result::Result<Vec<std::path::PathBuf>, String> {
    use crate::plan::budget as pb;
    let mut k = k.clone();
    k.curves = true;
    let b = budget_for(&k).map_err(|e| e.to_string())?;
    let dir = std::path::absolute(dir).unwrap_or_else(|_| dir.to_path_buf());
    let files = [
        (format!("{stem}.csv"), pb::csv(&b)),
        (format!("{stem}.md"), pb::markdown(&b)),
        (format!("{stem}.tex"), pb::proposal::latex(&b)),
        (format!("{stem}.svg"), pb::figure::svg(&b)),
        (
            format!("{stem}-justification.txt"),
            pb::proposal::justification(&b) + "\n",
        ),
    ];
    let mut written = files
        .into_iter()
        .map(|(name, text)| save(&dir.join(name), &text, None))
        .collect::<std::result::Result<Vec<_>, String>>()?;
    // The figure as PNG too, for a document that takes no SVG.
    let png = dir.join(format!("{stem}.png"));
    let bytes = pb::figure::png(&b).map_err(|e| e.to_string())?;
    write_atomic(&png, &bytes).map_err(|e| e.to_string())?;
    written.insert(4, png);
    Ok(written)
}

/// The files of a plan export, named after the site and span.
pub fn plan_paths(job: &PlanJob) -> [std::path::PathBuf; 4] {
    let st = &job.settings;
    let stem = format!("plan-{}-{}-to-{}", st.site.name, st.from, st.to);
    [
        job.dir.join(format!("{stem}.json")),
        job.dir.join(format!("{stem}.csv")),
        job.dir.join(format!("{stem}.ics")),
        job.dir
            .join(format!("night-{}-{}.md", st.site.name, job.sheet_night)),
    ]
}

/// Schedule the programme's range with its settings
/// (`plan::schedule::Request::programme`, as `rung plan` does) and write,
/// atomically, the plan file (`plan::file::save`), the visits as CSV
/// (`plan::export::visits_csv`), as iCalendar (`plan::export::ics`) and the
/// night sheet of `sheet_night` (`plan::export::night_sheet`). Returns the
/// files written.
pub fn export_plan(job: &PlanJob) -> Result<Vec<std::path::PathBuf>> {
    use crate::plan::export;
    use crate::plan::file::{self, PlanFile};
    use crate::plan::schedule::{self, Request};
    let st = &job.settings;
    let sch = schedule::schedule(&Request::programme(st, &job.targets, job.hours_per_night))?;
    let plan = PlanFile::new(
        st,
        &job.targets,
        job.targets_file.clone(),
        job.hours_per_night,
        sch.visits,
    );
    let [json, csv, ics, sheet] = plan_paths(job);
    std::fs::create_dir_all(&job.dir).map_err(|e| crate::error::RungError::Io {
        path: job.dir.clone(),
        source: e,
    })?;
    file::save(&plan, &json)?;
    write_atomic(&csv, export::visits_csv(&plan.visits, &st.site).as_bytes())?;
    write_atomic(
        &ics,
        export::ics(&plan.visits, &st.site, job.stamp).as_bytes(),
    )?;
    write_atomic(
        &sheet,
        export::night_sheet(
            &plan.visits,
            &st.site,
            job.sheet_night,
            &plan.sheet_header(),
        )
        .as_bytes(),
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
        // The backup is as private as the file it copies.
        crate::io::atomic::write_atomic_like(bp, bytes, Some(path)).map_err(|e| e.to_string())?;
    }
    write_atomic(path, text.as_bytes()).map_err(|e| e.to_string())?;
    Ok(path.to_path_buf())
}

/// Save the programme (see [`SaveJob`]): as it is when the file is still
/// the one this session last read or wrote; merged with another session's
/// changes when not; a conflict when both changed a target (nothing written).
pub fn save_programme(job: &SaveJob) -> Msg {
    // The programme's settings go with it to a new file (the demo saved as
    // the user's own keeps the demo's range, site and limits), never over a
    // settings file already there.
    if let Some((from, to)) = &job.settings
        && !to.exists()
        && let Ok(bytes) = std::fs::read(from)
        && let Err(e) = save(to, &String::from_utf8_lossy(&bytes), None)
    {
        return Msg::Saved(Err(format!(
            "cannot write the programme's settings beside it: {e}; nothing else was written"
        )));
    }
    save_programme_csv(job)
}

/// The programme's CSV part of [`save_programme`].
fn save_programme_csv(job: &SaveJob) -> Msg {
    use crate::io::merge::{bytes_fingerprint, merge3};
    let path = &job.path;
    let now = match std::fs::read(path) {
        Ok(b) => Some(b),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
        Err(e) => return Msg::Saved(Err(format!("cannot read {}: {e}", path.display()))),
    };
    let written = |text: &str| Some(bytes_fingerprint(text.as_bytes()));
    if let Some(bytes) = now
        .as_ref()
        .filter(|b| Some(bytes_fingerprint(b)) != job.expect)
    {
        if job.force {
            // The user chose to overwrite: what the other session saved is kept.
            let bak = crate::io::atomic::backup_path(path);
            if let Err(e) = crate::io::atomic::write_atomic_like(&bak, bytes, Some(path)) {
                return Msg::Saved(Err(e.to_string()));
            }
            return Msg::Saved(save(path, &job.text, None).map(|p| Saved {
                path: p,
                disk: written(&job.text),
                merged: None,
            }));
        }
        let theirs = match crate::io::targets::load_keeping(path) {
            Ok(l) if l.problems.is_empty() => l.targets,
            Ok(l) => {
                return Msg::Saved(Err(format!(
                    "{} was changed by another session or program and a row of it no longer reads ({}); nothing was written, your edits stay unsaved",
                    path.display(),
                    l.problems
                        .first()
                        .map(|p| p.to_string())
                        .unwrap_or_default()
                )));
            }
            Err(e) => return Msg::Saved(Err(e.to_string())),
        };
        let m = merge3(&job.base, &theirs, &job.mine);
        if !m.conflicts.is_empty() {
            return Msg::SaveConflict(m.conflicts);
        }
        let text = crate::io::write_targets::to_csv(&m.targets);
        return Msg::Saved(save(path, &text, job.backup.as_ref()).map(|p| Saved {
            path: p,
            disk: written(&text),
            merged: Some(m),
        }));
    }
    Msg::Saved(save(path, &job.text, job.backup.as_ref()).map(|p| Saved {
        path: p,
        disk: written(&job.text),
        merged: None,
    }))
}

/// Unsaved edits that an ended session left beside the programme file
/// (`crate::io::session::left_recoveries`: this session's own file name when it
/// is the first, and the files of other sessions that no longer run), the
/// newest first. Edits made on an earlier version of the file are merged with
/// what was saved since (`crate::io::merge`), a target both changed taking the
/// edits' version, and the question says so. A file that cannot be read is
/// left as it is and said in the first message; one that holds the programme
/// as it is now is not offered.
pub fn find_recovery(
    programme: &crate::tui::state::Programme,
    targets: &[Target],
    message: Option<String>,
    first: bool,
) -> (Option<crate::tui::state::Recovered>, Option<String>) {
    let found = crate::io::session::left_recoveries(&programme.save_path, first);
    let Some(path) = found.first().cloned() else {
        return (None, message);
    };
    let message = match found.len() {
        1 => message,
        n => message.or_else(|| {
            Some(format!(
                "{} more files of unsaved edits from ended sessions are offered at the next start",
                n - 1
            ))
        }),
    };
    let read = std::fs::read_to_string(&path)
        .map_err(|e| e.to_string())
        .and_then(|text| crate::io::merge::read_recovery(&text, &path, programme.refused_rows));
    let r = match read {
        Ok(r) => r,
        Err(why) => {
            return (
                None,
                Some(format!(
                    "unsaved edits in {} not offered back: {why} (the file is left as it is)",
                    path.display()
                )),
            );
        }
    };
    let (kept, note) = match r.base {
        Some((fp, base)) if fp != programme.disk => {
            let m = crate::io::merge::merge3(&base, targets, &r.mine);
            let mut kept = m.targets;
            for name in &m.conflicts {
                kept.retain(|t| &t.name != name);
                if let Some(t) = r.mine.iter().find(|t| &t.name == name) {
                    kept.push(t.clone());
                }
            }
            let mut note = format!(
                "They were made on an earlier version of {}: restoring merges them with what was saved since",
                programme.save_path.display()
            );
            if !m.theirs_changed.is_empty() {
                note.push_str(&format!(" ({})", m.theirs_changed.join(", ")));
            }
            if !m.conflicts.is_empty() {
                note.push_str(&format!(
                    ", and where both changed a target ({}) the edits' version is taken",
                    m.conflicts.join(", ")
                ));
            }
            (kept, Some(note))
        }
        _ => (r.mine, None),
    };
    if kept == targets {
        return (None, message);
    }
    let written = std::fs::metadata(&path)
        .and_then(|m| m.modified())
        .ok()
        .map(|t| {
            chrono::DateTime::<chrono::Local>::from(t)
                .format("%Y-%m-%d %H:%M")
                .to_string()
        });
    let r = crate::tui::state::Recovered {
        path,
        targets: kept,
        written,
        note,
    };
    (Some(r), message)
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
    run_until(effect, &Cancel::default())
}

/// [`run`], for a job a newer one may supersede: a budget stops between
/// targets once `cancel` is set and produces no message (the newer job
/// answers); other jobs run to the end (their results are dropped by the
/// state's generation or key when stale).
pub fn run_until(effect: Effect, cancel: &Cancel) -> Vec<Msg> {
    run_streaming(effect, cancel, &mut |_| {})
}

/// [`run_until`], handing what a job knows before it ends to `partial` as
/// it comes (a budget's targets, [`budget_streaming`]); the final messages
/// are returned.
pub fn run_streaming(effect: Effect, cancel: &Cancel, partial: &mut dyn FnMut(Msg)) -> Vec<Msg> {
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
        Effect::Budget(k) => match budget_streaming(&k, cancel, partial) {
            Ok(None) => Vec::new(),
            Ok(Some(b)) => vec![Msg::BudgetReady(k, Ok(Box::new(b)))],
            Err(e) => vec![Msg::BudgetReady(k, Err(e.to_string()))],
        },
        Effect::Nights(job) => {
            build_nights(&job, cancel);
            Vec::new()
        }
        Effect::Ladder(k) => {
            let r = ladder_for(&k).map(Box::new).map_err(|e| e.to_string());
            vec![Msg::LadderReady(k, r)]
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
        Effect::BudgetExport(job) => {
            let (k, dir, stem) = *job;
            vec![Msg::BudgetExported(
                budget_files(&k, &dir, &stem).map_err(|e| format!("budget not exported: {e}")),
            )]
        }
        Effect::ExportPlan(job) => vec![Msg::Exported(
            export_plan(&job).map_err(|e| format!("plan not exported: {e}")),
        )],
        Effect::Save(job) => vec![save_programme(&job)],
        Effect::Recovery { path, op } => vec![Msg::RecoveryKept(keep_recovery(&path, &op))],
        Effect::Batch(list) => list
            .into_iter()
            .flat_map(|e| run_until(e, cancel))
            .collect(),
        Effect::Next(job) => vec![Msg::NextReady(Box::new(next_data(&job)))],
    }
}

/// Apply a Next-view job: load the plan (with any marks its log holds that
/// the file does not), apply the mark or re-plan through `plan::log` (the log
/// row first, then the plan saved atomically), and rank the queue.
pub fn next_data(job: &crate::tui::msg::NextJob) -> crate::tui::state::NextData {
    use crate::plan::log;
    use crate::tui::msg::NextOp;
    let mut note = None;
    let mut refused = None;
    let plan = match &job.plan_file {
        None => None,
        Some(path) => {
            let step = || -> crate::error::Result<(crate::plan::file::PlanFile, Option<String>)> {
                let mut p = crate::plan::file::load(path)?;
                log::catch_up(&mut p, &log::log_path(path))?;
                let st = &job.settings;
                let what = match &job.op {
                    NextOp::Refresh => None,
                    NextOp::Done { id, typed } => {
                        let aside = log::mark_done(
                            path,
                            &mut p,
                            id,
                            &typed.mark(job.now),
                            &st.site,
                            &job.targets,
                            job.now,
                        )?;
                        Some(format!(
                            "{id} done, started {} UTC ({} local){}",
                            crate::output::clock_hm(job.now, &chrono_tz::UTC),
                            crate::output::clock_hm(job.now, &st.site.timezone),
                            aside.map(|n| format!("; {n}")).unwrap_or_default()
                        ))
                    }
                    NextOp::Lost(id) => {
                        log::mark_lost(path, &mut p, id, job.now)?;
                        Some(format!("{id} lost"))
                    }
                    NextOp::LoseNight => {
                        let night = crate::programme::tonight(&st.site, job.now)?;
                        log::lose_night(path, &mut p, night, job.now)?;
                        Some(format!("the rest of the night of {night} lost"))
                    }
                    NextOp::Replan => {
                        let mut ps = (**st).clone();
                        ps.from = p.from;
                        ps.to = p.to;
                        let s = log::replan(path, &mut p, &ps, &job.targets, job.now, job.now)?;
                        Some(format!(
                            "re-planned: {} visits ahead, {} epochs found no place",
                            s.visits
                                .iter()
                                .filter(|v| v.status == crate::plan::schedule::Status::Planned)
                                .count(),
                            s.unplaced.len()
                        ))
                    }
                };
                Ok((
                    p,
                    what.map(|w| format!("{w}; saved to {} and its log", path.display())),
                ))
            };
            // The log's length before the job: a mark refused after its row
            // was written (the plan file then failed) is in the log.
            let log_len =
                |p: &std::path::Path| std::fs::metadata(log::log_path(p)).map(|m| m.len()).ok();
            let before = log_len(path);
            match step() {
                Ok((p, w)) => {
                    note = w;
                    Some(p)
                }
                Err(e) => {
                    note = Some(match &job.op {
                        NextOp::Done { .. } if log_len(path) != before => format!(
                            "not done in the plan file: {e} (the mark is in the plan's log, \
                             which the plan takes when it is next loaded)"
                        ),
                        NextOp::Done { id, .. } => {
                            refused = Some(id.clone());
                            format!(
                                "not done: {e} (nothing written; the prompt keeps what you \
                                 typed: Enter tries again, Esc drops it)"
                            )
                        }
                        _ => format!("not done: {e}"),
                    });
                    crate::plan::file::load(path).ok()
                }
            }
        }
    };
    let queue = crate::plan::now::queue(&job.settings, &job.targets, plan.as_ref(), job.now)
        .map_err(|e| e.to_string());
    crate::tui::state::NextData {
        at: job.now,
        queue,
        plan,
        note,
        refused,
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
