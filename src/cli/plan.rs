//! `rung plan` (place visits on nights, save, re-plan, export) and
//! `rung budget` (what each distance goal costs).

use anyhow::{Context as _, Result};
use rung::astro::night::Limits;
use rung::astro::time::{Instant, parse_date};
use rung::ladder::Method;
use rung::photometry::Photometer;
use rung::plan::budget;
use rung::plan::export;
use rung::plan::file::{self, FORMAT, PlanFile};
use rung::plan::schedule::{self, Request, Status, fingerprint};
use std::collections::BTreeSet;
use std::path::PathBuf;

/// Arguments of `rung plan`.
#[derive(clap::Args)]
pub struct PlanArgs {
    /// Site name or LAT,LON,ELEV_M[,ZONE] (ignored with --load: the plan's own site is used).
    #[arg(long)]
    pub site: Option<String>,
    /// Targets file (CSV or TOML); with --load, defaults to the plan's own.
    #[arg(long)]
    pub targets: Option<PathBuf>,
    /// First night (YYYY-MM-DD).
    #[arg(long)]
    pub from: Option<String>,
    /// Last night (YYYY-MM-DD), inclusive.
    #[arg(long)]
    pub to: Option<String>,
    /// Telescope hours per night.
    #[arg(long, allow_hyphen_values = true)]
    pub hours_per_night: Option<f64>,
    /// Instrument name (config/instruments.toml or the user's file).
    #[arg(long)]
    pub instrument: Option<String>,
    /// Minimum altitude, degrees.
    #[arg(long, allow_hyphen_values = true)]
    pub min_alt: Option<f64>,
    /// Sun limit, degrees.
    #[arg(long, allow_hyphen_values = true)]
    pub sun_alt: Option<f64>,
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
    /// Place again everything that is not done (keeps done visits, skips lost nights).
    #[arg(long)]
    pub replan: bool,
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

fn instrument(site: &rung::astro::site::Site, name: &Option<String>) -> Result<Photometer> {
    Ok(match name {
        Some(n) => Photometer::from_name(n, site)?,
        None => Photometer::demo(site)?,
    })
}

/// Run `rung plan`.
pub fn run_plan(a: PlanArgs) -> Result<()> {
    let (mut plan, plan_path) = match &a.load {
        Some(p) => (Some(file::load(p)?), Some(p.clone())),
        None => (None, None),
    };
    let site_spec = match (&plan, &a.site) {
        (Some(p), _) => p.site.clone(),
        (None, Some(s)) => s.clone(),
        (None, None) => anyhow::bail!("give --site (or --load a saved plan)"),
    };
    // A site or targets file taken from a loaded plan is named as the plan's field.
    let from_plan = |field: &str| {
        plan_path
            .as_ref()
            .map(|p| format!("{}, field '{field}'", p.display()))
    };
    let site = match from_plan("site") {
        Some(w) if plan.is_some() => super::resolve_site(&site_spec).context(w)?,
        _ => super::resolve_site(&site_spec)?,
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
    let em = instrument(&site, &a.instrument)?;
    let owned = rung::ladder::methods()?;
    let ms: Vec<&dyn Method> = owned.iter().map(|m| m.as_ref()).collect();

    let mut outcomes = None;
    let mut p = match plan.take() {
        Some(p) => p,
        None => {
            let from = parse_date(a.from.as_deref().context("give --from YYYY-MM-DD")?)?;
            let to = parse_date(a.to.as_deref().context("give --to YYYY-MM-DD")?)?;
            let hours = a.hours_per_night.context("give --hours-per-night H")?;
            let limits = Limits::new(a.min_alt.unwrap_or(30.0), a.sun_alt.unwrap_or(-12.0))?;
            let req = Request {
                site: &site,
                targets: &targets,
                from,
                to,
                limits,
                hours_per_night: hours,
                methods: &ms,
                em: &em,
                done: vec![],
                lost_nights: BTreeSet::new(),
            };
            let s = schedule::schedule(&req)?;
            report_unplaced(&s);
            outcomes = Some(s.outcomes);
            PlanFile {
                format: FORMAT.into(),
                site: site_spec.clone(),
                targets_file: targets_path.display().to_string(),
                targets_fingerprint: fingerprint(&targets),
                from,
                to,
                hours_per_night: hours,
                min_alt_deg: limits.min_alt_deg,
                sun_alt_deg: limits.sun_alt_deg,
                lost_nights: BTreeSet::new(),
                visits: s.visits,
            }
        }
    };
    let mut changed = a.load.is_none();
    for n in &a.lost_night {
        let d = parse_date(n).context("--lost-night")?;
        p.lost_nights.insert(d);
        for v in p
            .visits
            .iter_mut()
            .filter(|v| v.night == d && v.status == Status::Planned)
        {
            v.status = Status::Lost;
        }
        changed = true;
    }
    if !a.done.is_empty() {
        p.mark(&a.done, Status::Done).context("--done")?;
        changed = true;
    }
    if !a.lost.is_empty() {
        p.mark(&a.lost, Status::Lost).context("--lost")?;
        changed = true;
    }
    if a.replan {
        let limits = p.limits()?;
        let hours = a.hours_per_night.unwrap_or(p.hours_per_night);
        let done: Vec<_> = p
            .visits
            .iter()
            .filter(|v| v.status == Status::Done)
            .cloned()
            .collect();
        let req = Request {
            site: &site,
            targets: &targets,
            from: p.from,
            to: p.to,
            limits,
            hours_per_night: hours,
            methods: &ms,
            em: &em,
            done,
            lost_nights: p.lost_nights.clone(),
        };
        let s = schedule::schedule(&req)?;
        report_unplaced(&s);
        p.replace_visits(s.visits.clone());
        p.hours_per_night = hours;
        changed = true;
        outcomes = Some(s.outcomes);
    }
    let save_to = a
        .save
        .clone()
        .or_else(|| if changed { plan_path.clone() } else { None });
    if let Some(path) = &save_to {
        if plan_path.as_ref() == Some(path) && path.exists() {
            let old = std::fs::read(path).with_context(|| format!("reading {}", path.display()))?;
            let bak = PathBuf::from(format!("{}.bak", path.display()));
            rung::io::atomic::write_atomic(&bak, &old)?;
        }
        file::save(&p, path)?;
        eprintln!("rung: plan saved to {}", path.display());
    }
    if let Some(path) = &a.ics {
        let stamp = Instant::now()?;
        rung::io::atomic::write_atomic(path, export::ics(&p.visits, &site, stamp).as_bytes())?;
        eprintln!("rung: iCalendar written to {}", path.display());
    }
    if let Some(d) = &a.sheet {
        let d = parse_date(d).context("--sheet")?;
        let header = format!(
            "Plan {} to {}, {:.1} h per night, window above {:.0}° with the Sun below {:.0}°.",
            p.from, p.to, p.hours_per_night, p.min_alt_deg, p.sun_alt_deg
        );
        print!("{}", export::night_sheet(&p.visits, &site, d, &header));
        return Ok(());
    }
    if a.csv {
        print!("{}", export::visits_csv(&p.visits, &site));
        return Ok(());
    }
    if a.json {
        let v = serde_json::json!({
            "plan": &p,
            "outcomes": outcomes,
        });
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(());
    }
    print_plan(&p, &site, outcomes.as_deref());
    Ok(())
}

fn report_unplaced(s: &schedule::Schedule) {
    if !s.unplaced.is_empty() {
        eprintln!(
            "rung: note: {} requested epochs found no place (see --json 'unplaced' via the library)",
            s.unplaced.len()
        );
    }
}

fn print_plan(
    p: &PlanFile,
    site: &rung::astro::site::Site,
    outcomes: Option<&[schedule::Outcome]>,
) {
    println!(
        "Plan {} to {} at {} ({:.1} h per night, above {:.0}°, Sun below {:.0}°): {} visits",
        p.from,
        p.to,
        site.name,
        p.hours_per_night,
        p.min_alt_deg,
        p.sun_alt_deg,
        p.visits.len()
    );
    let mut night = None;
    for v in &p.visits {
        if night != Some(v.night) {
            night = Some(v.night);
            let lost = if p.lost_nights.contains(&v.night) {
                "  (lost)"
            } else {
                ""
            };
            println!("  night {}{lost}", v.night);
        }
        println!(
            "    {} UTC / {} local  {:<14} {:<9} {:>2}×{:>5.0} s  X={:.2}  {:<7} {}",
            super::utc_hm(Some(v.start)),
            super::local_hm(Some(v.start), site),
            v.target,
            v.kind.as_str(),
            v.n_exposures,
            v.exptime_s / v.n_exposures.max(1) as f64,
            v.airmass,
            format!("{:?}", v.status).to_lowercase(),
            v.cautions.first().map(|c| c.as_str()).unwrap_or("")
        );
    }
    if let Some(os) = outcomes {
        println!();
        println!(
            "  {:<14} {:<9} {:>7} {:>5} {:>8} {:>8}  verdict",
            "target", "method", "planned", "done", "σd/d %", "goal %"
        );
        for o in os {
            let got = o
                .prediction
                .as_ref()
                .map(|p| p.distance_precision_pct)
                .filter(|x| x.is_finite());
            println!(
                "  {:<14} {:<9} {:>7} {:>5} {:>8} {:>8}  {}",
                o.target,
                o.kind.as_str(),
                o.planned,
                o.done,
                super::opt(got, 2),
                super::opt(o.goal_pct, 1),
                match o.meets_goal {
                    Some(true) => "meets goal".to_string(),
                    Some(false) => "short of goal".to_string(),
                    None => o.notes.join("; "),
                }
            );
        }
    }
}

/// Arguments of `rung budget`.
#[derive(clap::Args)]
#[command(
    mut_arg("min_alt", |a| a.help("Minimum altitude, degrees")),
    mut_arg("sun_alt", |a| a.help("Sun limit, degrees")),
)]
pub struct BudgetArgs {
    /// Site name or LAT,LON,ELEV_M[,ZONE].
    #[arg(long)]
    pub site: String,
    /// Targets file (CSV or TOML).
    #[arg(long)]
    pub targets: PathBuf,
    /// First night of the season (YYYY-MM-DD).
    #[arg(long)]
    pub from: String,
    /// Last night of the season (YYYY-MM-DD).
    #[arg(long)]
    pub to: String,
    /// Distance-precision goal in percent for targets without their own goal_pct.
    #[arg(long, allow_hyphen_values = true)]
    pub goal: Option<f64>,
    /// Instrument name.
    #[arg(long)]
    pub instrument: Option<String>,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// JSON output.
    #[arg(long)]
    pub json: bool,
    /// CSV output.
    #[arg(long)]
    pub csv: bool,
    /// A Markdown table ready for a proposal.
    #[arg(long)]
    pub markdown: bool,
}

/// Run `rung budget`.
pub fn run_budget(a: BudgetArgs) -> Result<()> {
    if let Some(g) = a.goal {
        budget::check_goal(g)?;
    }
    let site = super::resolve_site(&a.site)?;
    let from = parse_date(&a.from)?;
    let to = parse_date(&a.to)?;
    let limits = a.limits.limits()?;
    let targets = super::load_targets(&a.targets)?;
    let em = instrument(&site, &a.instrument)?;
    let owned = rung::ladder::methods()?;
    let ms: Vec<&dyn Method> = owned.iter().map(|m| m.as_ref()).collect();
    let b = budget::budget(&site, &targets, &ms, &em, from, to, limits, a.goal)?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&b)?);
    } else if a.csv {
        print!("{}", budget::csv(&b));
    } else if a.markdown {
        print!("{}", budget::markdown(&b));
    } else {
        println!(
            "Distance budget {from} to {to} at {} (window above {:.0}°, Sun below {:.0}°)",
            site.name, a.limits.min_alt, a.limits.sun_alt
        );
        println!(
            "  {:<14} {:<9} {:>6} {:>8} {:>6} {:>8} {:>7}  verdict",
            "target", "method", "goal %", "reach %", "epochs", "exp/ep s", "hours"
        );
        for r in &b.rows {
            println!(
                "  {:<14} {:<9} {:>6.1} {:>8} {:>6} {:>8.0} {:>7.1}  {}",
                r.target,
                r.kind.as_str(),
                r.goal_pct,
                super::opt(Some(r.achievable_pct).filter(|x| x.is_finite()), 2),
                r.epochs,
                r.exptime_per_epoch_s,
                r.hours,
                budget::verdict_text(&r.verdict)
            );
        }
        println!("  total {:.1} h", b.total_hours);
        for (k, h) in &b.hours_by_semester {
            println!("  semester {k}: {h:.1} h");
        }
        for (name, why) in &b.skipped {
            println!("  skipped {name}: {why}");
        }
    }
    Ok(())
}
