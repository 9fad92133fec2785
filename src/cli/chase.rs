//! `rung chase`: follow a fresh thermonuclear supernova from discovery to a
//! standardized-candle distance.

use anyhow::{Context as _, Result, bail};
use rung::astro::frames::Context;
use rung::astro::time::{Instant, parse_instant};
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::{Kind, Target};
use rung::ladder::Verdict;
use rung::ladder::transient::{
    Chase, ChaseOptions, TransientConfig, TransientMethod, check_band, night_of,
};
use rung::programme::Report;
use serde_json::{Map, Value, json};
use std::path::PathBuf;
use std::sync::Arc;

/// Arguments of `rung chase`.
#[derive(clap::Args)]
#[command(
    mut_arg("target", |a| a.help("A transient target by name from --targets")),
    mut_arg("targets", |a| a.help("Targets file (CSV or TOML) for --target; default the demo programme")),
    mut_arg("goal_pct", |a| a.help("Distance-precision goal, percent (default: the target's goal_pct, else the programme's)")),
    mut_arg("ra", |a| a.help("Right ascension (ICRS), degrees or HH:MM:SS.s, instead of --target")),
    mut_arg("dec", |a| a.help("Declination (ICRS), degrees or ±DD:MM:SS")),
)]
pub struct Args {
    #[command(flatten)]
    pub aim: super::args::MethodTarget,
    /// Discovery instant, ISO 8601 (UTC when no zone is given).
    #[arg(long)]
    pub discovered: Option<String>,
    /// Magnitude at discovery (in --band).
    #[arg(long, allow_hyphen_values = true)]
    pub mag: Option<f64>,
    /// Expected peak magnitude (in --band), when known.
    #[arg(long, allow_hyphen_values = true)]
    pub peak_mag: Option<f64>,
    /// Redshift of the host (heliocentric), ≥ 0.
    #[arg(long, allow_hyphen_values = true)]
    pub redshift: Option<f64>,
    /// Band of the magnitudes and of the follow-up.
    #[arg(long, default_value = "B")]
    pub band: String,
    /// Foreground extinction in --band, mag.
    #[arg(
        long = "extinction-mag",
        visible_alias = "extinction",
        default_value_t = 0.0,
        allow_hyphen_values = true
    )]
    pub extinction: f64,
    /// Name shown for a target given by coordinates.
    #[arg(long, default_value = "transient")]
    pub name: String,
    /// The present instant (ISO 8601, or 'now'): nothing is planned before it (default: the programme's range, from the coming night)
    #[arg(long)]
    pub now: Option<String>,
    /// Days of follow-up after discovery (default from config/transient.toml).
    #[arg(long)]
    pub horizon_days: Option<u32>,
    /// Signal-to-noise per epoch (default from config/transient.toml).
    #[arg(long, allow_hyphen_values = true)]
    pub snr: Option<f64>,
    /// Decline rate Δm15 assumed for planning, mag (default from config).
    #[arg(long, allow_hyphen_values = true)]
    pub dm15: Option<f64>,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    /// Also require this σ of the peak magnitude, mag.
    #[arg(long, allow_hyphen_values = true)]
    pub sigma_peak: Option<f64>,
    /// Also require this σ of Δm15, mag.
    #[arg(long, allow_hyphen_values = true)]
    pub sigma_dm15: Option<f64>,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    /// Transient configuration (TOML with keys of config/transient.toml; merged over it and your transient.toml)
    #[arg(long)]
    pub config: Option<PathBuf>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

fn build_target(a: &Args, cfg: &TransientConfig) -> Result<Target> {
    if let Some(n) = &a.aim.target {
        if a.aim.ra.is_some() || a.aim.dec.is_some() || a.discovered.is_some() {
            bail!("give either --target NAME or --ra/--dec/--discovered, not both");
        }
        let t = super::target_by_name(&a.aim.targets, n)?;
        if t.kind != Kind::Transient {
            bail!(
                "target {} is a {} target, not a transient",
                t.name,
                t.kind.as_str()
            );
        }
        check_band(cfg, &t.band).with_context(|| format!("target {}", t.name))?;
        return Ok(t);
    }
    let (Some(ra), Some(dec), Some(disc)) = (&a.aim.ra, &a.aim.dec, &a.discovered) else {
        bail!("give --target NAME (with --targets FILE), or --ra, --dec and --discovered");
    };
    let band = a.band.trim().to_ascii_uppercase();
    check_band(cfg, &band)?;
    use rung::bounds::{EXTINCTION_MAG, MAG, REDSHIFT};
    REDSHIFT.check_opt_as("--redshift", a.redshift)?;
    MAG.check_opt_as("--mag", a.mag)?;
    MAG.check_opt_as("--peak-mag", a.peak_mag)?;
    EXTINCTION_MAG.check_as("--extinction-mag", a.extinction)?;
    if a.mag.is_none() && a.peak_mag.is_none() && a.redshift.is_none() {
        bail!("give --mag (at discovery), --peak-mag or --redshift to place the light curve");
    }
    let mut t = Target::plain(
        &a.name,
        parse_ra_deg(ra).context("--ra")?,
        parse_dec_deg(dec).context("--dec")?,
    );
    t.kind = Kind::Transient;
    t.band = band;
    t.discovered = Some(parse_instant(disc).context("--discovered")?);
    t.mag_now = a.mag;
    t.peak_mag = a.peak_mag;
    t.redshift = a.redshift;
    t.extinction_mag = a.extinction;
    t.goal_pct = None;
    Ok(t)
}

/// Run `rung chase`.
pub fn run(a: Args) -> Result<()> {
    let programme = a.aim.targets.clone().unwrap_or_else(super::demo_programme);
    let mut st = super::settings(
        super::args::choices(
            Some(&a.site),
            Some(&a.instrument),
            Some(&a.limits),
            Some(&a.range),
            Some(&a.goal),
        ),
        Some(&programme),
        &[("transient.toml", a.config.as_ref())],
    )?;
    let mut cfg: TransientConfig = st
        .methods
        .get::<TransientMethod>()
        .context("no transient method")?
        .cfg
        .clone();
    let mut target = build_target(&a, &cfg)?;
    if a.goal.goal_pct.is_some() {
        target.goal_pct = a.goal.goal_pct;
    }
    let clock = super::now()?;
    let now = match a.now.as_deref().map(str::trim) {
        None | Some("now") => clock,
        Some(t) => parse_instant(t).context("--now")?,
    };
    let disc = target
        .discovered
        .context("the target has no discovery time")?;
    if disc.seconds_since(&now) > 0.0 {
        bail!(
            "discovery {} of {} is in the future relative to --now {}",
            disc.iso(),
            target.name,
            now.iso()
        );
    }
    if let Some(h) = a.horizon_days {
        if !(1..=365).contains(&h) {
            bail!("--horizon-days {h} is not within 1..365");
        }
        cfg.planning.horizon_days = h;
    }
    rung::bounds::SNR.check_opt_as("--snr", a.snr)?;
    let horizon = cfg.planning.horizon_days;
    // With --now, the chase starts at that instant and runs to the horizon
    // after discovery, as asked; without it, over the programme's range (from
    // the coming night), as the budget plans it.
    if a.now.is_some() {
        let first = night_of(&st.site, disc);
        st.to = first + chrono::Duration::days(horizon as i64);
        st.from = night_of(&st.site, now).max(first);
        if st.from > st.to {
            bail!(
                "--now {} is past the {horizon}-day horizon after discovery ({} to {})",
                now.iso(),
                first,
                st.to
            );
        }
    }
    let method = TransientMethod::with(
        cfg,
        ChaseOptions {
            now: a.now.is_some().then_some(now),
            snr_goal: a.snr,
            dm15: a.dm15,
            sigma_peak_goal_mag: a.sigma_peak,
            sigma_dm15_goal: a.sigma_dm15,
        },
    );
    let st = st.with_method(Arc::new(method));
    let site = st.site.clone();
    let photometer = &st.photometer;
    let chase = match rung::programme::report(&st, &target)? {
        Report::Chase(c) => *c,
        _ => bail!("no chase for {}", target.name),
    };
    // Sky brightness at each epoch, from the photometry model.
    let place = target.place();
    let sky: Vec<Option<f64>> = chase
        .nights
        .iter()
        .map(|n| {
            let t = n.epoch_time?;
            let ctx = Context::exact(&site, t).ok()?;
            photometer
                .sky(&target.band, &ctx, &place)
                .ok()
                .map(|s| s.sky_mag_arcsec2)
        })
        .collect();
    if a.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&to_json(
                &chase,
                &site,
                &target,
                now,
                &sky,
                &photometer.instrument.name
            ))?
        );
    } else {
        print_table(&chase, &site, &target, &sky);
    }
    Ok(())
}

fn iso(t: Option<Instant>) -> Value {
    json!(t.map(|t| t.round_to_second().iso()))
}

fn num(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

fn to_json(
    c: &Chase,
    site: &rung::astro::site::Site,
    t: &Target,
    now: Instant,
    sky: &[Option<f64>],
    instrument: &str,
) -> Value {
    let mut o = Map::new();
    o.insert("target".into(), json!(c.target));
    o.insert("site".into(), json!(site.name));
    o.insert("instrument".into(), json!(instrument));
    o.insert("band".into(), json!(c.band));
    o.insert("discovered".into(), iso(t.discovered));
    o.insert("now".into(), iso(Some(now)));
    o.insert("redshift".into(), json!(t.redshift));
    o.insert("extinction_mag".into(), json!(t.extinction_mag));
    o.insert("t_max".into(), iso(Some(c.t_max)));
    o.insert("peak_mag".into(), num(c.placement.params.m_max));
    o.insert("hubble_peak_mag".into(), json!(c.placement.hubble_peak_mag));
    o.insert("dm15_assumed".into(), num(c.placement.params.dm15));
    o.insert("snr_goal".into(), num(c.snr_goal));
    o.insert("goal_pct".into(), num(c.goal_pct));
    let nights: Vec<Value> = c
        .nights
        .iter()
        .zip(sky)
        .map(|(n, s)| {
            json!({
                "night": n.night.to_string(),
                "window_start": iso(n.window_start),
                "window_end": iso(n.window_end),
                "observable_hours": num(n.observable_hours),
                "epoch_time": iso(n.epoch_time),
                "best_airmass": n.best_airmass,
                "moon_separation_deg": num(n.moon_separation_deg),
                "moon_illumination": num(n.moon_illumination),
                "moon_altitude_deg": num(n.moon_altitude_deg),
                "sky_mag_arcsec2": s,
                "solar_elongation_deg": num(n.solar_elongation_deg),
                "phase_days": n.phase_days,
                "expected_mag": n.expected_mag,
                "exptime_s": n.exptime_s,
                "n_exposures": n.n_exposures,
                "visit_s": n.visit_s,
                "usable": n.usable,
                "planned": n.planned,
                "reason": n.reason,
                "cautions": n.cautions,
                "epoch_note": n.epoch_note,
            })
        })
        .collect();
    o.insert("nights".into(), Value::Array(nights));
    o.insert(
        "last_night".into(),
        json!(c.last_night.map(|d| d.to_string())),
    );
    o.insert(
        "observable_at_horizon".into(),
        json!(c.observable_at_horizon),
    );
    let d = &c.design;
    o.insert("cadence_days".into(), json!(d.cadence_days));
    o.insert("dense_around_max".into(), json!(d.dense_around_max));
    let epochs: Vec<Value> = d
        .nights
        .iter()
        .filter_map(|i| {
            let n = &c.nights[*i];
            Some(json!({
                "night": n.night.to_string(),
                "time": iso(n.epoch_time),
                "expected_mag": n.expected_mag,
                "exptime_s": n.exptime_s?,
                "n_exposures": n.n_exposures,
                "snr": c.snr_goal,
                "airmass": n.best_airmass,
                "visit_s": n.visit_s,
            }))
        })
        .collect();
    o.insert("epochs".into(), Value::Array(epochs));
    o.insert("sigma_tmax_d".into(), json!(d.fit.map(|f| f.sigma_tmax_d)));
    o.insert(
        "sigma_peak_mag".into(),
        json!(d.fit.map(|f| f.sigma_peak_mag)),
    );
    o.insert("sigma_dm15".into(), json!(d.fit.map(|f| f.sigma_dm15)));
    let b = d.budget;
    o.insert("sigma_mu_mag".into(), json!(b.map(|b| b.sigma_mu_mag)));
    o.insert(
        "sigma_mu_phot_mag".into(),
        json!(b.map(|b| b.sigma_mu_phot_mag)),
    );
    o.insert(
        "sigma_mu_floor_mag".into(),
        json!(b.map(|b| b.sigma_mu_floor_mag)),
    );
    o.insert("sigma_int_mag".into(), json!(b.map(|b| b.sigma_int_mag)));
    o.insert(
        "sigma_extinction_mag".into(),
        json!(b.map(|b| b.sigma_extinction_mag)),
    );
    o.insert(
        "sigma_pec_mag".into(),
        json!(b.and_then(|b| b.sigma_pec_mag)),
    );
    o.insert(
        "distance_precision_pct".into(),
        json!(b.map(|b| b.distance_precision_pct)),
    );
    o.insert("floor_pct".into(), json!(b.map(|b| b.floor_pct)));
    o.insert("hours_needed".into(), num(d.hours_needed));
    o.insert("goal_met".into(), json!(d.meets_goal));
    o.insert(
        "verdict".into(),
        serde_json::to_value(&c.verdict).unwrap_or(Value::Null),
    );
    o.insert("cautions".into(), json!(c.cautions));
    o.insert("notes".into(), json!(c.notes));
    Value::Object(o)
}

fn verdict_text(v: &Verdict) -> String {
    match v {
        Verdict::Reachable => "goal reachable".into(),
        Verdict::LimitedByFloor { floor_pct } => {
            format!("limited by the floor of {floor_pct:.1}%")
        }
        Verdict::NotObservable { when } => match when {
            Some(w) => format!("not reachable: {w}"),
            None => "not observable enough".into(),
        },
        Verdict::NeedsMoreSeasons { .. } => "needs more nights".into(),
    }
}

fn print_table(c: &Chase, site: &rung::astro::site::Site, t: &Target, sky: &[Option<f64>]) {
    let o = |v: Option<f64>, dp: usize| super::opt(v, dp);
    println!(
        "Chase of {} ({} band) from {} at {} (times local {})",
        c.target,
        c.band,
        t.discovered
            .map(|d| d.round_to_second().iso())
            .unwrap_or_default(),
        site.name,
        site.timezone.name()
    );
    println!(
        "  maximum expected {} at {:.2} mag (Δm15 {:.2} assumed)",
        c.t_max.round_to_second().iso(),
        c.placement.params.m_max,
        c.placement.params.dm15
    );
    println!(
        "  {:<10} {:>5}-{:<5} {:>6} {:>6} {:>5} {:>5} {:>6} {:>6} {:>6} {:>7}  plan",
        "night", "from", "to", "airm", "moon°", "sun°", "sky", "phase", "mag", "exp_s", "reason"
    );
    for (n, s) in c.nights.iter().zip(sky) {
        println!(
            "  {:<10} {:>5}-{:<5} {:>6} {:>6.0} {:>5.0} {:>5} {:>6} {:>6} {:>6}  {}{}",
            n.night,
            super::local_hm(n.window_start, site),
            super::local_hm(n.window_end, site),
            o(n.best_airmass, 2),
            n.moon_separation_deg,
            n.solar_elongation_deg,
            o(*s, 1),
            o(n.phase_days, 1),
            o(n.expected_mag, 2),
            o(n.exptime_s, 0),
            if n.planned { "* " } else { "  " },
            n.reason.clone().unwrap_or_default()
        );
    }
    println!(
        "  last observable night: {}",
        c.last_night
            .map(|d| d.to_string())
            .unwrap_or_else(|| "none".into())
    );
    let d = &c.design;
    println!(
        "  cadence: every {} night(s){}, {} epochs, {:.2} h with overheads",
        d.cadence_days,
        if d.dense_around_max {
            " plus every night around maximum"
        } else {
            ""
        },
        d.epochs.len(),
        d.hours_needed
    );
    if let Some(f) = d.fit {
        println!(
            "  σ(t_max) {:.2} d   σ(peak) {:.3} mag   σ(Δm15) {:.3} mag",
            f.sigma_tmax_d, f.sigma_peak_mag, f.sigma_dm15
        );
    }
    if let Some(b) = d.budget {
        println!(
            "  σ_μ {:.3} mag (photometry {:.3}, floor {:.3}) → σ_d/d {:.1}% (goal {}%, floor {:.1}%)",
            b.sigma_mu_mag,
            b.sigma_mu_phot_mag,
            b.sigma_mu_floor_mag,
            b.distance_precision_pct,
            c.goal_pct,
            b.floor_pct
        );
    }
    println!("  verdict: {}", verdict_text(&c.verdict));
    for s in &c.cautions {
        println!("  CAUTION: {s}");
    }
    for s in &c.notes {
        println!("  note: {s}");
    }
}
