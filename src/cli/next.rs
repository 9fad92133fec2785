//! `rung next`: what to observe now, ranked (`rung::plan::now`), the same
//! rows as the terminal UI's Next view.

use anyhow::Result;
use std::path::PathBuf;

/// Arguments of `rung next`.
#[derive(clap::Args)]
pub struct Args {
    /// Targets file (CSV or TOML); default: the plan's, else the demo programme
    #[arg(long)]
    pub targets: Option<PathBuf>,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// A saved plan (rung plan --save): its visits of tonight rank with their ids, and its log's marks are applied
    #[arg(long)]
    pub plan: Option<PathBuf>,
    /// The instant, ISO 8601 or 'now' (default: the clock, RUNG_NOW or now)
    #[arg(long)]
    pub at: Option<String>,
    /// Show at most this many rows (default: all)
    #[arg(long)]
    pub rows: Option<usize>,
    /// JSON output.
    #[arg(long)]
    pub json: bool,
}

/// Run `rung next`.
pub fn run(a: Args) -> Result<()> {
    if a.rows == Some(0) {
        anyhow::bail!("--rows 0 would show no row: give 1 or more (leave --rows out for all)");
    }
    let plan = match &a.plan {
        Some(p) => {
            let mut plan = rung::plan::file::load(p)?;
            rung::plan::log::catch_up(&mut plan, &rung::plan::log::log_path(p))?;
            Some(plan)
        }
        None => None,
    };
    let targets_path = match (&a.targets, &plan) {
        (Some(t), _) => t.clone(),
        (None, Some(p)) => PathBuf::from(&p.targets_file),
        (None, None) => super::demo_programme(),
    };
    let targets = super::load_targets(&targets_path)?;
    let mut choices = super::args::choices(Some(&a.site), None, Some(&a.limits), None, None);
    if let Some(p) = &plan {
        choices.site = choices.site.or(Some(p.site.clone()));
        choices.min_alt_deg = choices.min_alt_deg.or(Some(p.min_alt_deg));
        choices.sun_alt_deg = choices.sun_alt_deg.or(Some(p.sun_alt_deg));
        choices.instrument = p.instrument.clone();
    }
    let st = super::settings(choices, Some(&targets_path), &[])?;
    let now = super::instant_or(a.at.as_deref(), super::now()?, "--at")?;
    let mut q = rung::plan::now::queue(&st, &targets, plan.as_ref(), now)?;
    if let Some(n) = a.rows {
        q.rows.truncate(n);
    }
    if a.json {
        let mut v = serde_json::to_value(&q)?;
        if let Some(o) = v.as_object_mut() {
            o.insert("settings".into(), st.to_json());
        }
        return super::print_json(&v);
    }
    let tz = &st.site.timezone;
    super::outln!(
        "Next at {} UTC ({} local) at {}: Sun {:.1}°{}",
        rung::output::clock_hm(now, &chrono_tz::UTC),
        rung::output::clock_hm(now, tz),
        st.site.name,
        q.sun_altitude_deg,
        if q.dark { "" } else { " (not dark)" }
    );
    super::outln!(
        "  {:>2} {:<14} {:<16} {:>5} {:>6} {:>5} {:>5} {:>5}  {:<22} why",
        "#",
        "target",
        "visit",
        "alt°",
        "HA h",
        "X",
        "moon°",
        "left",
        "exposure"
    );
    for r in &q.rows {
        let exposure = if r.exposures.is_empty() {
            "-".to_string()
        } else {
            r.exposures
                .iter()
                .map(|b| {
                    format!(
                        "{} {}×{:.0}s",
                        b.band,
                        b.n_exposures,
                        b.exptime_s / b.n_exposures.max(1) as f64
                    )
                })
                .collect::<Vec<_>>()
                .join(" ")
        };
        let left = if r.visible {
            format!("{:.0}m", r.minutes_left)
        } else {
            "-".into()
        };
        let why = r.why();
        super::outln!(
            "  {:>2} {:<14} {:<16} {:>5.1} {:>+6.2} {:>5} {:>5.0} {:>5}  {:<22} {}",
            r.rank,
            r.target,
            visit_cell(r),
            r.altitude_deg,
            r.hour_angle_h,
            super::opt(r.airmass.filter(|x| *x < 10.0), 2),
            r.moon_separation_deg,
            left,
            exposure,
            why
        );
    }
    Ok(())
}

/// The visit column: tonight's planned visit, else the one marked done
/// tonight with "✓" (its observed time is among the reasons), else "-".
fn visit_cell(r: &rung::plan::now::NowRow) -> String {
    match (&r.visit_id, &r.done_visit_id) {
        (Some(id), _) => id.clone(),
        (None, Some(id)) => format!("{id} ✓"),
        (None, None) => "-".into(),
    }
}
