//! Running [`Effect`]s: the library computes, the result comes back as a [`Msg`].
//! The terminal runner runs the computing jobs on background threads; tests and
//! benchmarks call [`run`] directly.

use crate::astro::night::Night;
use crate::astro::{pointing, sun_caution};
use crate::error::Result;
use crate::io::atomic::write_atomic;
use crate::io::targets::Target;
use crate::tui::msg::{Effect, Msg, NightJob, SeasonJob, SeasonRows};
use crate::tui::state::{NightData, TargetRow};
use rayon::prelude::*;
use std::sync::Arc;

/// One target's row of the night table.
pub fn target_row(night: &Night, t: &Target, limits: &crate::astro::night::Limits) -> TargetRow {
    let place = t.place();
    let tn = night.target(&place, limits);
    let obs: Vec<_> = night.contexts.iter().map(|c| c.observe(&place)).collect();
    let alt_deg = obs.iter().map(|o| o.alt_rad.to_degrees() as f32).collect();
    let moon_sep_deg = tn.max_altitude_time.map(|tm| {
        let c = night.context(tm);
        c.observe(&place).separation_rad(&c.moon()).to_degrees()
    });
    // Sun caution: any grid instant with the target up and the Sun up within the avoidance angle.
    let mut caution = None;
    for ((c, o), s) in night.contexts.iter().zip(&obs).zip(&night.sun_alt_deg) {
        if o.alt_rad > 0.0 && *s > crate::astro::SUN_UP_DEG {
            let p = pointing(&night.site, c, &place);
            if let Some(m) = sun_caution(&night.site, &p) {
                caution = Some((c.t, m));
                break;
            }
        }
    }
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

/// Season rows for a job: a loop over nights (`Night::new`) and `night.target`
/// for the targets asked for. (To be replaced by the season engine once it is merged.)
pub fn season_rows(job: &SeasonJob) -> Result<SeasonRows> {
    let k = &job.key;
    let nights = match &job.nights {
        Some(n) => n.clone(),
        None => {
            let list: Result<Vec<Night>> = (0..k.nights)
                .into_par_iter()
                .map(|i| {
                    let d = k.from + chrono::Days::new((i * k.step_days) as u64);
                    Night::new(&job.site, d)
                })
                .collect();
            Arc::new(list?)
        }
    };
    let rows = job
        .targets
        .par_iter()
        .map(|t| {
            let place = t.place();
            let hours = nights
                .iter()
                .map(|n| n.target(&place, &k.limits).observable_hours)
                .collect();
            (t.name.clone(), hours)
        })
        .collect();
    Ok(SeasonRows {
        key: k.clone(),
        nights,
        rows,
    })
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
        Effect::Save { path, text, backup } => {
            vec![Msg::Saved(save(&path, &text, backup.as_ref()))]
        }
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
