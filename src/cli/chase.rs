//! `rung chase`: follow a fresh thermonuclear supernova from discovery to a
//! standardized-candle distance.

use anyhow::{Context as _, Result, bail};
use rung::astro::frames::Context;
use rung::astro::time::{Instant, parse_instant};
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::{Kind, Target};
use rung::ladder::transient::{
    Chase, ChaseOptions, TransientConfig, TransientMethod, check_band, night_of,
};
use rung::ladder::{Setting, Verdict};
use rung::photometry::{DEMO_INSTRUMENT, Photometer};
use serde_json::{Map, Value, json};
use std::path::PathBuf;

/// Arguments of `rung chase`.
#[derive(clap::Args)]
#[command(
    mut_arg("target", |a| a.help("A transient target by name from --targets")),
    mut_arg("targets", |a| a.help("Targets file (CSV or TOML) for --target; default the demo programme")),
    mut_arg("ra", |a| a.help("Right ascension (ICRS), degrees or HH:MM:SS.s, instead of --target")),
    mut_arg("dec", |a| a.help("Declination (ICRS), degrees or ±DD:MM:SS")),
    mut_arg("min_alt", |a| a.help("Minimum altitude for the windows, degrees")),
    mut_arg("sun_alt", |a| a.help("The Sun must be below this altitude, degrees")),
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
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    pub extinction: f64,
    /// Name shown for a target given by coordinates.
    #[arg(long, default_value = "transient")]
    pub name: String,
    /// The present instant (ISO 8601, or 'now'): nothing is planned before it.
    #[arg(long, default_value = "now")]
    pub now: String,
    /// Days of follow-up after discovery (default from config/transient.toml).
    #[arg(long)]
    pub horizon_days: Option<u32>,
    /// Signal-to-noise per epoch (default from config/transient.toml).
    #[arg(long, allow_hyphen_values = true)]
    pub snr: Option<f64>,
    /// Decline rate Δm15 assumed for planning, mag (default from config).
    #[arg(long, allow_hyphen_values = true)]
    pub dm15: Option<f64>,
    /// Distance-precision goal, percent (default: the target's goal_pct, else config).
    #[arg(long, allow_hyphen_values = true)]
    pub goal: Option<f64>,
    /// Also require this σ of the peak magnitude, mag.
    #[arg(long, allow_hyphen_values = true)]
    pub sigma_peak: Option<f64>,
    /// Also require this σ of Δm15, mag.
    #[arg(long, allow_hyphen_values = true)]
    pub sigma_dm15: Option<f64>,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Instrument name (config/instruments.toml or the user's).
    #[arg(long, default_value = DEMO_INSTRUMENT)]
    pub instrument: String,
    /// Another transient configuration (TOML like config/transient.toml).
    #[arg(long)]
    pub config: Option<PathBuf>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

fn load_config(a: &Args) -> Result<TransientConfig> {
    match &a.config {
        None => Ok(TransientConfig::embedded()?),
        Some(p) => {
            let text = std::fs::read_to_string(p)
                .with_context(|| format!("cannot read {}", p.display()))?;
            Ok(TransientConfig::parse(&text, p)?)
        }
    }
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
    EXTINCTION_MAG.check_as("--extinction", a.extinction)?;
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
    let site = super::resolve_site(&a.aim.site)?;
    let limits = a.limits.limits()?;
    let cfg = load_config(&a)?;
    let target = build_target(&a, &cfg)?;
    let now = parse_instant(&a.now).context("--now")?;
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
    if let Some(g) = a.goal
        && !(g.is_finite() && g > 0.0 && g <= 100.0)
    {
        bail!("--goal {g} is not a percentage in (0, 100]");
    }
    let horizon = a.horizon_days.unwrap_or(cfg.planning.horizon_days);
    if !(1..=365).contains(&horizon) {
        bail!("--horizon-days {horizon} is not within 1..365");
    }
    let first = night_of(&site, disc);
    let to = first + chrono::Duration::days(horizon as i64);
    let from = night_of(&site, now).max(first);
    if from > to {
        bail!(
            "--now {} is past the {horizon}-day horizon after discovery ({} to {to})",
            now.iso(),
            first
        );
    }
    rung::bounds::SNR.check_opt_as("--snr", a.snr)?;
    let photometer = Photometer::from_name(&a.instrument, &site)?;
    let method = TransientMethod::with(
        cfg,
        ChaseOptions {
            now: Some(now),
            snr_goal: a.snr,
            dm15: a.dm15,
            sigma_peak_goal_mag: a.sigma_peak,
            sigma_dm15_goal: a.sigma_dm15,
        },
    );
    let setting = Setting {
        site: &site,
        target: &target,
        from,
        to,
        limits,
    };
    let chase = method.chase(&setting, &photometer, a.goal)?;
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
                &a.instrument
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
