//! `rung plan`: place visits on nights, save, re-plan, export.

use anyhow::{Context as _, Result};
use rung::astro::time::parse_date;
use rung::plan::export;
use rung::plan::file::{self, PlanFile};
use rung::plan::schedule::{self, Request, Status};
use std::path::PathBuf;

/// Arguments of `rung plan`.
#[derive(clap::Args)]
pub struct PlanArgs {
    /// Site name from the catalogue, or LAT,LON,ELEV_M[,ZONE] (default: the programme's, else pampa-lucero; with --load the plan's own)
    #[arg(long, allow_hyphen_values = true)]
    pub site: Option<String>,
    /// Targets file (CSV or TOML); with --load, defaults to the plan's own.
    #[arg(long)]
    pub targets: Option<PathBuf>,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    /// Telescope hours per night.
    #[arg(long, allow_hyphen_values = true)]
    pub hours_per_night: Option<f64>,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Load a saved plan (to mark visits and nights, re-plan, or export it).
    #[arg(long)]
    pub load: Option<PathBuf>,
    /// Mark a night as lost (repeatable); its planned visits become lost.
    #[arg(long = "lost-night")]
    pub lost_night: Vec<String>,
    /// Mark a visit as done by id (repeatable).
    #[arg(long)]
    pub done: Vec<String>,
    /// Mark a visit as lost by id (repeatable).
    #[arg(long)]
    pub lost: Vec<String>,
    /// When the visits given to --done started, as observed, ISO 8601 (default: --now, else the clock when marking); a re-plan holds each from that start for its planned length and spaces the target's later visits from it
    #[arg(long = "observed")]
    pub observed: Option<String>,
    /// Seeing FWHM noted for the visits given to --done, arcseconds
    #[arg(long)]
    pub seeing: Option<f64>,
    /// A comment for the visits given to --done
    #[arg(long)]
    pub comment: Option<String>,
    /// The signal-to-noise measured on the visits given to --done: 62 (their primary band) or BAND=SNR,... (B=55,V=70); the outcomes take it in place of the expected one
    #[arg(long, allow_hyphen_values = true)]
    pub snr: Option<String>,
    /// Rebuild the plan from its observing log (LOG, the plan.log.csv written beside a saved plan) and save it with --save
    #[arg(long)]
    pub rebuild: Option<PathBuf>,
    /// Place again everything that is not done (keeps done visits, skips lost nights, places nothing before --now, else the clock: RUNG_NOW or now).
    #[arg(long)]
    pub replan: bool,
    /// The present instant, ISO 8601 or 'now' (default: the clock, RUNG_NOW or now): --replan places nothing before it and --done without --observed takes it as the visit's start (the observing log still records when each mark was written)
    #[arg(long)]
    pub now: Option<String>,
    /// Last night the methods plan for, YYYY-MM-DD, on or after --to, when a plan is made or rebuilt (default: the programme's own last night when --to ends earlier: its settings file's, else 36 months after --from; their epochs after --to are counted in the outcomes as planned).
    #[arg(long)]
    pub horizon_to: Option<String>,
    /// Save the plan to this file (atomic; with --load the default is the loaded file, with a .bak of the old one).
    #[arg(long)]
    pub save: Option<PathBuf>,
    /// Write an iCalendar file with one event per visit.
    #[arg(long)]
    pub ics: Option<PathBuf>,
    /// Print the night sheet (Markdown) of this night.
    #[arg(long)]
    pub sheet: Option<String>,
    /// Visits as CSV on stdout.
    #[arg(long)]
    pub csv: bool,
    /// The whole schedule as JSON on stdout.
    #[arg(long)]
    pub json: bool,
}

/// Run `rung plan`.
pub fn run_plan(a: PlanArgs) -> Result<()> {
    let (mut plan, plan_path) = match (&a.load, &a.rebuild) {
        (Some(_), Some(_)) => anyhow::bail!("give --load or --rebuild, not both"),
        (Some(p), None) => {
            let mut plan = file::load(p)?;
            // Marks logged by a process that was stopped before it saved the plan.
            let n = rung::plan::log::catch_up(&mut plan, &rung::plan::log::log_path(p))?;
            if n > 0 {
                eprintln!(
                    "rung: applied {n} mark(s) from {} that the plan file did not hold yet",
                    rung::plan::log::log_path(p).display()
                );
                rung::plan::log::save_plan(p, &plan)?;
            }
            (Some(plan), Some(p.clone()))
        }
        (None, Some(log)) => {
            // The plan's settings from the log's first row.
            let head = match rung::plan::log::read(log)?
                .into_iter()
                .next()
                .map(|e| e.event)
            {
                Some(rung::plan::log::Event::Plan(h)) => *h,
                _ => anyhow::bail!(
                    "{} does not start with a plan's settings: not an observing log of rung",
                    log.display()
                ),
            };
            (Some(head), None)
        }
        (None, None) => (None, None),
    };
    // A site or targets file taken from a loaded plan is named as the plan's field.
    let from_plan = |field: &str| {
        plan_path
            .as_ref()
            .map(|p| format!("{}, field '{field}'", p.display()))
    };
    let targets_path = match (&a.targets, &plan) {
        (Some(t), _) => t.clone(),
        (None, Some(p)) => PathBuf::from(&p.targets_file),
        (None, None) => anyhow::bail!("give --targets FILE"),
    };
    let targets = match from_plan("targets_file") {
        Some(w) if a.targets.is_none() => super::load_targets(&targets_path).context(w)?,
        _ => super::load_targets(&targets_path)?,
    };
    if let (Some(p), Some(pp)) = (&plan, &plan_path) {
        p.check_targets(&targets, pp)?;
    }
    // The settings: a loaded plan's own site, range, limits and instrument,
    // else the command line over the programme's settings.
    let mut choices = super::args::choices(
        None,
        Some(&a.instrument),
        Some(&a.limits),
        Some(&a.range),
        Some(&a.goal),
    );
    choices.site = a.site.clone();
    if let Some(p) = &plan {
        choices.site = Some(p.site.clone());
        choices.from = Some(p.from.to_string());
        choices.to = Some(p.to.to_string());
        choices.min_alt_deg = Some(p.min_alt_deg);
        choices.sun_alt_deg = Some(p.sun_alt_deg);
        if choices.instrument.is_none() {
            choices.instrument = p.instrument.clone();
        }
    }
    // A plan's own site that no longer resolves is named as the plan's field.
    if let (Some(p), Some(w)) = (&plan, from_plan("site")) {
        rung::io::sites::resolve(&p.site).context(w)?;
    }
    let choices_for_horizon = choices.clone();
    let st = super::settings(choices, Some(&targets_path), &[])?;
    // A range too long for a plan, named in the settings file that gave it.
    st.nights()?;

    let horizon = match a.horizon_to.as_deref() {
        // A loaded plan's re-plans are replayed from its observing log,
        // which holds the horizon the plan was made with: it stays.
        Some(_) if a.load.is_some() => anyhow::bail!(
            "--horizon-to applies when a plan is made (or rebuilt with --rebuild): a loaded plan keeps the horizon it was made with{}",
            plan.as_ref()
                .and_then(|p| p.horizon_to)
                .map(|h| format!(" ({h})"))
                .unwrap_or_default()
        ),
        Some(h) => {
            let h = parse_date(h).context("--horizon-to")?;
            if h < st.to {
                anyhow::bail!(
                    "--horizon-to: {h} is before the plan's last night {}: the methods plan at least to it (give a later night, or leave --horizon-to out)",
                    st.to
                );
            }
            Some(h)
        }
        // A --to that shortens the programme makes the plan a slice of it:
        // the methods plan to the programme's own last night, within the
        // longest span a plan may have from its first night (a --from long
        // before a multi-year programme would otherwise ask for more).
        None if a.range.to.is_some() && plan.is_none() => {
            let mut whole = choices_for_horizon.clone();
            whole.to = None;
            let prog = super::settings(whole, Some(&targets_path), &[])?;
            Some(schedule::slice_horizon(&st, prog.to))
        }
        None => None,
    };
    let mut sched: Option<schedule::Schedule> = None;
    let mut p = match plan.take() {
        Some(_) if a.rebuild.is_some() => {
            let log = a.rebuild.as_ref().expect("checked");
            let (p, notes) = rung::plan::log::rebuild(log, &st, &targets)?;
            for n in &notes {
                eprintln!("rung: warning: {n}");
            }
            eprintln!(
                "rung: rebuilt {} visits ({} done, {} lost) from {}",
                p.visits.len(),
                p.visits.iter().filter(|v| v.status == Status::Done).count(),
                p.visits.iter().filter(|v| v.status == Status::Lost).count(),
                log.display()
            );
            p
        }
        Some(p) => p,
        None => {
            let hours = a.hours_per_night.context("give --hours-per-night H")?;
            let mut req = Request::programme(&st, &targets, hours);
            if let Some(h) = horizon {
                req.horizon_to = h;
            }
            let s = schedule::schedule(&req)?;
            report_unplaced(&s);
            let mut p = PlanFile::new(
                &st,
                &targets,
                targets_path.display().to_string(),
                hours,
                s.visits.clone(),
            );
            p.horizon_to = Some(s.horizon_to);
            sched = Some(s);
            p
        }
    };
    let site = st.site.clone();
    let mut changed = a.load.is_none();
    // The clock marks are logged at; the present the plan is marked and
    // re-planned at (--now, else the clock).
    let clock = super::now()?;
    let now = super::instant_or(a.now.as_deref(), clock, "--now")?;
    let observed = super::instant_or(a.observed.as_deref(), now, "--observed")?;
    if a.done.is_empty() {
        for (given, flag) in [
            (a.observed.is_some(), "--observed"),
            (a.seeing.is_some(), "--seeing"),
            (a.comment.is_some(), "--comment"),
            (a.snr.is_some(), "--snr"),
        ] {
            if given {
                anyhow::bail!("{flag} describes the visits given to --done: give --done ID too");
            }
        }
    }
    if a.now.is_some() && !a.replan && a.done.is_empty() {
        anyhow::bail!(
            "--now is the present a re-plan or a mark is made at: give --replan or --done ID too"
        );
    }
    let snr_measured = match a.snr.as_deref() {
        None => Vec::new(),
        Some(t) => rung::plan::schedule::parse_snr_measured(t).context("--snr")?,
    };
    let mark = rung::plan::schedule::DoneMark {
        observed,
        seeing_arcsec: a.seeing,
        comment: a.comment.clone(),
        snr_measured,
    };
    let marks = !a.lost_night.is_empty() || !a.done.is_empty() || !a.lost.is_empty() || a.replan;
    if let (Some(path), true) = (&plan_path, marks) {
        // A loaded plan: every mark goes to its observing log, then the plan
        // is saved (plan::log); the plan as it was is kept as .bak.
        let before = std::fs::read(path).with_context(|| path.display().to_string())?;
        rung::io::atomic::write_atomic_like(
            &rung::io::atomic::backup_path(path),
            &before,
            Some(path),
        )?;
        use rung::plan::log;
        for n in &a.lost_night {
            let d = parse_date(n).context("--lost-night")?;
            log::lose_night(path, &mut p, d, clock).context("--lost-night")?;
        }
        for id in &a.done {
            let note = log::mark_done(path, &mut p, id, &mark, &site, &targets, clock)
                .context("--done")?;
            if let Some(n) = note {
                eprintln!("rung: note: {n}");
            }
        }
        for id in &a.lost {
            log::mark_lost(path, &mut p, id, clock).context("--lost")?;
        }
        if a.replan {
            if a.hours_per_night.is_some() {
                p.hours_per_night = a.hours_per_night.unwrap_or(p.hours_per_night);
            }
            let s = log::replan(path, &mut p, &st, &targets, now, clock)?;
            report_unplaced(&s);
            sched = Some(s);
        }
        eprintln!(
            "rung: marks written to {} and the plan saved",
            log::log_path(path).display()
        );
    } else {
        for n in &a.lost_night {
            let d = parse_date(n).context("--lost-night")?;
            // As a saved plan's mark (log::lose_night): a night outside
            // the plan's would make a file its next load refuses.
            if let Some(why) = rung::plan::file::check_night(d, p.from, p.to) {
                return Err(rung::error::RungError::invalid("night", why)).context("--lost-night");
            }
            p.lose_night(d);
            changed = true;
        }
        if !a.done.is_empty() {
            for id in &a.done {
                let (v, note) = p
                    .marked_done(id, &mark, &site, &targets)
                    .context("--done")?;
                *p.visit_mut(id)? = v;
                if let Some(n) = note {
                    eprintln!("rung: note: {n}");
                }
            }
            changed = true;
        }
        if !a.lost.is_empty() {
            p.mark(&a.lost, Status::Lost).context("--lost")?;
            changed = true;
        }
        if a.replan {
            let s = p.replan(&st, &targets, now, a.hours_per_night, horizon)?;
            report_unplaced(&s);
            changed = true;
            sched = Some(s);
        }
    }
    let save_to = a
        .save
        .clone()
        .or_else(|| if changed { plan_path.clone() } else { None });
    if a.rebuild.is_some() && save_to.is_none() {
        eprintln!("rung: note: the rebuilt plan is not saved (give --save FILE)");
    }
    if let Some(path) = &save_to {
        if plan_path.as_ref() == Some(path) {
            // Re-saving over the loaded plan keeps its previous version as .bak.
            rung::io::atomic::save_with_backup(path, p.to_json().as_bytes())?;
        } else {
            // A new plan file starts its observing log (its settings row);
            // a plan rebuilt from its own log keeps that log.
            let log = rung::plan::log::log_path(path);
            if a.rebuild.as_deref() == Some(log.as_path()) {
                file::save(&p, path)?;
            } else {
                if log.exists() {
                    let old = rung::io::atomic::with_suffix(&log, ".old");
                    std::fs::rename(&log, &old).with_context(|| log.display().to_string())?;
                    eprintln!(
                        "rung: the earlier log {} moved to {}",
                        log.display(),
                        old.display()
                    );
                }
                p.log_seq = 0;
                let marked: Vec<_> = p
                    .visits
                    .iter()
                    .filter(|v| v.status != Status::Planned)
                    .cloned()
                    .collect();
                for v in &marked {
                    let e = if v.status == Status::Done {
                        rung::plan::log::Event::Done(Box::new(v.clone()))
                    } else {
                        rung::plan::log::Event::Lost(Box::new(v.clone()))
                    };
                    if p.log_seq == 0 {
                        rung::plan::log::start(path, &mut p, now)?;
                    }
                    p.log_seq = rung::plan::log::append(&log, &p, e, now)?.seq;
                }
                rung::plan::log::start(path, &mut p, now)?;
                file::save(&p, path)?;
            }
        }
        eprintln!("rung: plan saved to {}", path.display());
    }
    if let Some(path) = &a.ics {
        let stamp = super::now()?;
        rung::io::atomic::write_atomic(path, export::ics(&p.visits, &site, stamp).as_bytes())?;
        eprintln!("rung: iCalendar written to {}", path.display());
    }
    if let Some(d) = &a.sheet {
        let d = parse_date(d).context("--sheet")?;
        print!(
            "{}",
            export::night_sheet(&p.visits, &site, d, &p.sheet_header())
        );
        return Ok(());
    }
    if a.csv {
        print!("{}", export::visits_csv(&p.visits, &site));
        return Ok(());
    }
    if a.json {
        // The two large parts (the plan's visits, the targets' outcomes)
        // made values side by side; the document as `output::json` makes
        // it, without copying it into a second value.
        let (plan_json, outcomes) = rayon::join(
            || rung::output::to_json_value(&p),
            || {
                sched
                    .as_ref()
                    .map(|s| rung::output::json_array_par(&s.outcomes))
                    .transpose()
            },
        );
        let (mut plan_json, outcomes) = (plan_json?, outcomes?);
        // Each visit's span as held (Visit::span): a done visit from its
        // observed start, any other as planned; the times the table shows.
        if let Some(vs) = plan_json["visits"].as_array_mut() {
            for (j, v) in vs.iter_mut().zip(&p.visits) {
                let (a, b) = v.span();
                if let Some(o) = j.as_object_mut() {
                    o.insert("span_start".into(), serde_json::to_value(a)?);
                    o.insert("span_end".into(), serde_json::to_value(b)?);
                    // The night it is shown under (Visit::held_night).
                    o.insert(
                        "held_night".into(),
                        serde_json::to_value(v.held_night(&site))?,
                    );
                }
            }
        }
        // The parts moved into the document (json! would copy each value).
        let mut v = serde_json::Map::new();
        v.insert("plan".into(), plan_json);
        v.insert("outcomes".into(), outcomes.unwrap_or_default());
        v.insert(
            "unplaced".into(),
            serde_json::to_value(sched.as_ref().map(|s| &s.unplaced))?,
        );
        v.insert(
            "nights".into(),
            serde_json::to_value(sched.as_ref().map(|s| &s.nights))?,
        );
        v.insert(
            "horizon_to".into(),
            serde_json::to_value(sched.as_ref().map(|s| s.horizon_to))?,
        );
        v.insert("settings".into(), st.to_json());
        let v = serde_json::Value::Object(v);
        println!("{}", rung::output::json_value(v)?);
        return Ok(());
    }
    print_plan(&p, &site, sched.as_ref());
    Ok(())
}

fn report_unplaced(s: &schedule::Schedule) {
    if !s.unplaced.is_empty() {
        eprintln!(
            "rung: note: {} requested epochs found no place (listed with the reason under 'unplaced' in --json)",
            s.unplaced.len()
        );
    }
}

fn print_plan(p: &PlanFile, site: &rung::astro::site::Site, sched: Option<&schedule::Schedule>) {
    let outcomes = sched.map(|s| s.outcomes.as_slice());
    let uses: std::collections::HashMap<_, _> = sched
        .map(|s| s.nights.iter().map(|n| (n.night, n)).collect())
        .unwrap_or_default();
    super::outln!(
        "Plan {} to {} at {} ({:.1} h per night, above {:.0}°, Sun below {:.0}°): {} visits",
        p.from,
        p.to,
        site.name,
        p.hours_per_night,
        p.min_alt_deg,
        p.sun_alt_deg,
        p.visits.len()
    );
    // Night by night (a done visit on the night it was observed in,
    // Visit::held_night), each night's visits in the order of the times
    // shown (a done visit at its observed start, Visit::span), as the night
    // sheet lists them.
    let mut shown: Vec<(chrono::NaiveDate, &rung::plan::schedule::Visit)> =
        p.visits.iter().map(|v| (v.held_night(site), v)).collect();
    shown.sort_by(|(na, a), (nb, b)| {
        na.cmp(nb)
            .then_with(|| rung::plan::schedule::Visit::by_span_start(a, b))
    });
    let mut night = None;
    for (vn, v) in shown {
        if night != Some(vn) {
            night = Some(vn);
            let lost = if p.lost_nights.contains(&vn) {
                "  (lost)"
            } else {
                ""
            };
            let used = uses
                .get(&vn)
                .map(|n| {
                    format!(
                        "  {:.1} of {:.1} h used ({:.0} %){}",
                        n.used_hours,
                        n.capacity_hours,
                        100.0 * n.used_fraction,
                        if n.wanting == 0 && n.used_fraction < 0.999 && !n.lost {
                            ", every visit that buys precision placed"
                        } else {
                            ""
                        }
                    )
                })
                .unwrap_or_default();
            super::outln!("  night {}{lost}{used}", vn);
        }
        // A done visit at its observed start (Visit::span), as `rung next`
        // and the UI show it.
        let start = v.span().0;
        super::outln!(
            "    {} UTC / {} local  {:<16} {:<9} {:<5} {:>2}×{:>5.0} s  X={:.2}  {:<7} {}",
            super::utc_hm(Some(start)),
            super::local_hm(Some(start), site),
            v.id,
            v.kind.as_str(),
            export::bands(v),
            v.n_exposures,
            v.exptime_s / v.n_exposures.max(1) as f64,
            v.airmass,
            v.status_words(),
            v.cautions.first().map(|c| c.as_str()).unwrap_or("")
        );
    }
    if let Some(s) = sched {
        let (used, cap): (f64, f64) = s.nights.iter().fold((0.0, 0.0), |a, n| {
            (a.0 + n.used_hours, a.1 + n.capacity_hours)
        });
        super::outln!(
            "  {:.1} of {:.1} telescope hours used ({:.0} %); the methods plan to {}; ids (NAME#N) are what --done and --lost take",
            used,
            cap,
            if cap > 0.0 { 100.0 * used / cap } else { 0.0 },
            s.horizon_to
        );
    }
    if let Some(os) = outcomes {
        super::outln!();
        super::outln!(
            "  {:<14} {:<9} {:>7} {:>5} {:>8} {:>8}  verdict",
            "target",
            "method",
            "planned",
            "done",
            "σd/d %",
            "goal %"
        );
        for o in os {
            let got = o.distance_precision_pct;
            super::outln!(
                "  {:<14} {:<9} {:>7} {:>5} {:>8} {:>8}  {}",
                o.target,
                o.kind.as_str(),
                o.planned,
                o.done,
                super::opt(got, 2),
                super::opt(o.goal_pct, 1),
                o.verdict()
                    .map(|v| v.text())
                    .unwrap_or_else(|| o.notes.join("; "))
            );
        }
    }
}
