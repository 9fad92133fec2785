//! `rung chase`: follow a fresh thermonuclear supernova from discovery to a
//! standardized-candle distance.

use anyhow::{Context as _, Result, bail};
use rung::astro::frames::Context;
use rung::astro::time::{Instant, parse_instant};
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::{Kind, Target};
use rung::ladder::chain::HostDistance;
use rung::ladder::transient::{
    Chase, ChaseOptions, Relation, Role, TransientConfig, TransientMethod, check_band, night_of,
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
    /// Band of the magnitudes given with --mag and --peak-mag.
    #[arg(long, default_value = "B")]
    pub band: String,
    /// Bands of the follow-up, comma-separated, B first (default from config).
    #[arg(long, value_delimiter = ',')]
    pub bands: Option<Vec<String>>,
    /// Spectroscopic class, e.g. Ia (default: a candidate, to be classified).
    #[arg(long, value_name = "CLASS")]
    pub classification: Option<String>,
    /// The host's own distance modulus, mag (a calibrator).
    #[arg(long, allow_hyphen_values = true)]
    pub host_mu: Option<f64>,
    /// The uncertainty of --host-mu, mag.
    #[arg(long, allow_hyphen_values = true, requires = "host_mu")]
    pub host_mu_err: Option<f64>,
    /// Standardization: stretch-colour or decline-rate (default from config).
    #[arg(long, value_name = "RELATION")]
    pub standardization: Option<String>,
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
    if a.mag.is_none() && a.peak_mag.is_none() && a.redshift.is_none() && a.host_mu.is_none() {
        bail!(
            "give --mag (at discovery), --peak-mag, --redshift or --host-mu to place the light curve"
        );
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
    // A host named on the row: its planned distance, from the computation
    // the ladder plans its calibrators with, over the programme's settings
    // (before --now narrows the range to the chase's). --host-mu overrides
    // it, as host_mu_mag on the row does.
    // A calibrator already observed (its peak's error given): nothing to
    // chase; its calibration as the ladder carries it.
    if a.aim.target.is_some() && !target.host.is_empty() && target.peak_err_mag.is_some() {
        return observed_calibrator(&a, &st, &programme, &target);
    }
    let host = match (&a.aim.target, a.host_mu) {
        (Some(_), None) if !target.host.is_empty() => {
            let targets = super::load_targets(&programme)?;
            let h = rung::ladder::chain::host_distance(&st, &targets, Some(&programme), &target)?;
            if let Some(h) = &h {
                target.host_mu_mag = Some(h.modulus_mag);
                target.host_mu_err_mag = Some(h.sigma_mag);
            }
            h
        }
        (Some(_), Some(mu)) if !target.host.is_empty() => Some(HostDistance {
            host: target.host.clone(),
            node: target.host.clone(),
            modulus_mag: mu,
            sigma_mag: a.host_mu_err.unwrap_or(f64::NAN),
            source: format!(
                "--host-mu on the command line: an override of {}'s planned distance",
                target.host
            ),
            overridden: true,
        }),
        _ => None,
    };
    let clock = super::now()?;
    let now = super::instant_or(a.now.as_deref(), clock, "--now")?;
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
    let relation = match &a.standardization {
        None => None,
        Some(r) => Some(Relation::parse(r).with_context(|| {
            format!("--standardization {r}: give stretch-colour or decline-rate")
        })?),
    };
    let bands = a.bands.as_ref().map(|v| {
        v.iter()
            .map(|b| b.trim().to_ascii_uppercase())
            .filter(|b| !b.is_empty())
            .collect::<Vec<_>>()
    });
    let method = TransientMethod::with(
        cfg,
        ChaseOptions {
            now: a.now.is_some().then_some(now),
            snr_goal: a.snr,
            dm15: a.dm15,
            sigma_peak_goal_mag: a.sigma_peak,
            sigma_dm15_goal: a.sigma_dm15,
            relation,
            bands,
            classification: a.classification.clone(),
            host_mu_mag: match (a.host_mu, a.host_mu_err) {
                (Some(m), Some(e)) => Some((m, e)),
                (Some(_), None) => bail!("give --host-mu-err (mag) with --host-mu"),
                (None, _) => None,
            },
            zero_point: None,
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
        super::print_json(&to_json(
            &chase,
            &site,
            &target,
            now,
            &sky,
            &photometer.instrument.name,
            host.as_ref(),
        ))?;
    } else {
        print_table(&chase, &site, &target, &sky, host.as_ref());
    }
    Ok(())
}

/// `rung chase` of a calibrator already observed (`peak_err_mag` given):
/// its host's planned distance and the peak absolute magnitude it
/// calibrates, from the ladder of the programme (`rung ladder`'s row).
fn observed_calibrator(
    a: &Args,
    st: &rung::programme::Settings,
    programme: &std::path::Path,
    target: &Target,
) -> Result<()> {
    let targets = super::load_targets(programme)?;
    // The host link checked as for a calibrator to chase (file, line, field).
    let h = rung::ladder::chain::host_distance(st, &targets, Some(programme), target)?;
    let l = rung::ladder::chain::build(st, &targets, Some(programme))?;
    let Some(row) = rung::ladder::chain::calibrators_of(&l)
        .into_iter()
        .find(|r| r.target == target.name)
    else {
        let why = l
            .left_out
            .iter()
            .find(|(n, _)| n == &target.name)
            .map_or("it is not on the ladder".to_string(), |(_, w)| w.clone());
        bail!("{}: no calibration: {why}", target.name);
    };
    let note = h.as_ref().filter(|h| h.overridden).map(|_| {
        "host_mu_mag on the row is not used for a supernova already observed: the ladder takes its host's planned distance".to_string()
    });
    if a.json {
        let mut cal = json!(row);
        if let Some(m) = cal.as_object_mut() {
            m.insert("host_node".into(), json!(row.host));
            m.insert("host".into(), json!(target.host));
            m.insert("host_overridden".into(), json!(false));
        }
        super::print_json(&json!({
            "target": target.name,
            "role": "calibrator",
            "observed": true,
            "peak_err_mag": target.peak_err_mag,
            "calibration": cal,
            "notes": note.into_iter().collect::<Vec<_>>(),
            "settings": st.to_json(),
        }))?;
    } else {
        super::outln!(
            "{}: a calibrator already observed (its peak's error {} mag given): nothing to chase",
            target.name,
            target.peak_err_mag.unwrap_or_default()
        );
        super::outln!(
            "  calibrator: host {} at μ {:.3} ± {:.3} mag ({})",
            target.host,
            row.host_mu_mag,
            row.host_mu_err_mag,
            row.host_source
        );
        super::outln!(
            "  calibrated peak absolute magnitude M_B {:.3} ± {:.3} mag (host distance {:.3}, the supernova's own {:.3}; as rung ladder)",
            row.peak_abs_mag,
            row.sigma_mag,
            row.sigma_host_mag,
            row.sigma_own_mag
        );
        super::outln!("  M_B {}", row.peak_abs_mag_how);
        if let Some(n) = note {
            super::outln!("  note: {n}");
        }
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
    host: Option<&HostDistance>,
) -> Value {
    let mut o = Map::new();
    o.insert("target".into(), json!(c.target));
    o.insert("site".into(), json!(site.name));
    o.insert("instrument".into(), json!(instrument));
    o.insert("band".into(), json!(c.band));
    o.insert("bands".into(), json!(c.bands));
    o.insert("discovered".into(), iso(t.discovered));
    o.insert("now".into(), iso(Some(now)));
    o.insert("redshift".into(), json!(t.redshift));
    o.insert("extinction_mag".into(), json!(t.extinction_mag));
    o.insert("provisional".into(), json!(c.provisional));
    o.insert(
        "classification".into(),
        json!({
            "status": c.classification.status,
            "needed": c.classification.needed,
            "night": c.classification.night.map(|d| d.to_string()),
            "time": iso(c.classification.time),
            "spectrum": c.classification.spectrum,
            "note": c.classification.note,
        }),
    );
    o.insert("relation".into(), json!(c.standardizer.relation.as_str()));
    o.insert("zero_point".into(), json!(c.standardizer.zero_point));
    o.insert(
        "cosmology".into(),
        json!({
            "h0_km_s_mpc": c.standardizer.cosmology.h0_km_s_mpc,
            "omega_m": c.standardizer.cosmology.omega_m,
        }),
    );
    o.insert("role".into(), json!(c.role.as_str()));
    if let Role::HubbleFlow { z } = c.role {
        o.insert(
            "luminosity_distance_mpc".into(),
            json!(c.standardizer.cosmology.luminosity_distance_mpc(z).ok()),
        );
    }
    if let Role::Calibrator {
        host_mu_mag,
        host_mu_err_mag,
    } = c.role
    {
        o.insert("host_mu_mag".into(), json!(host_mu_mag));
        o.insert("host_mu_err_mag".into(), json!(host_mu_err_mag));
    }
    if let Some(cal) = c.calibration() {
        let mut v = json!(cal);
        if let Some(m) = v.as_object_mut() {
            m.insert("host".into(), json!(host.map(|h| h.host.clone())));
            m.insert("host_node".into(), json!(host.map(|h| h.node.clone())));
            m.insert(
                "host_source".into(),
                json!(
                    host.map(|h| h.source.clone())
                        .unwrap_or_else(|| "given as a host distance modulus".into())
                ),
            );
            m.insert(
                "host_overridden".into(),
                json!(host.is_none_or(|h| h.overridden)),
            );
        }
        o.insert("calibration".into(), v);
    }
    o.insert("peak_abs_mag".into(), num(c.peak_abs_mag));
    o.insert("t_max".into(), iso(Some(c.t_max)));
    o.insert("peak_mag".into(), num(c.placement.params.m_max));
    o.insert("hubble_peak_mag".into(), json!(c.placement.hubble_peak_mag));
    o.insert("dm15_assumed".into(), num(c.placement.params.dm15));
    o.insert(
        "colour_assumed_mag".into(),
        num(c.placement.params.colour_mag),
    );
    o.insert("rise_assumed_d".into(), num(c.placement.params.rise_days));
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
                "bands": n.bands,
                "spectrum": if n.classification { json!(n.spectrum) } else { Value::Null },
                "classification": n.classification,
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
    o.insert("near_max_every".into(), json!(d.near_max_every));
    o.insert("dense_around_max".into(), json!(d.dense_around_max));
    let epochs: Vec<Value> = d
        .nights
        .iter()
        .zip(&d.epochs)
        .map(|(i, e)| {
            let n = &c.nights[*i];
            json!({
                "night": n.night.to_string(),
                "time": iso(Some(e.time)),
                "expected_mag": n.expected_mag,
                "exptime_s": e.exptime_s,
                "n_exposures": e.n_exposures,
                "snr": e.snr,
                "airmass": num(e.airmass),
                "visit_s": e.visit_s,
                "exposures": e.exposures,
            })
        })
        .collect();
    o.insert("epochs".into(), Value::Array(epochs));
    o.insert("sigma_tmax_d".into(), json!(d.fit.map(|f| f.sigma_tmax_d)));
    o.insert(
        "sigma_peak_mag".into(),
        json!(d.fit.map(|f| f.sigma_peak_mag)),
    );
    o.insert("sigma_dm15".into(), json!(d.fit.map(|f| f.sigma_dm15)));
    o.insert(
        "sigma_colour_mag".into(),
        json!(d.fit.map(|f| f.sigma_colour_mag)),
    );
    o.insert("sigma_rise_d".into(), json!(d.fit.map(|f| f.sigma_rise_d)));
    let b = d.budget;
    o.insert("sigma_mu_mag".into(), json!(b.map(|b| b.sigma_mu_mag)));
    o.insert(
        "sigma_mu_phot_mag".into(),
        json!(b.map(|b| b.sigma_mu_phot_mag)),
    );
    o.insert(
        "sigma_mu_phot_one_lost_mag".into(),
        json!(d.sigma_mu_phot_one_lost_mag),
    );
    o.insert(
        "worst_lost_night".into(),
        json!(d.worst_lost_night.map(|n| n.to_string())),
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
        "sigma_host_rv_mag".into(),
        json!(b.and_then(|b| b.sigma_host_rv_mag)),
    );
    o.insert(
        "sigma_kcorr_mag".into(),
        json!(b.map(|b| b.sigma_kcorr_mag)),
    );
    o.insert(
        "sigma_pec_mag".into(),
        json!(b.and_then(|b| b.sigma_pec_mag)),
    );
    o.insert(
        "sigma_host_distance_mag".into(),
        json!(b.and_then(|b| b.sigma_host_distance_mag)),
    );
    o.insert(
        "sigma_zero_point_mag".into(),
        json!(b.and_then(|b| b.sigma_zero_point_mag)),
    );
    o.insert(
        "error_terms".into(),
        json!(b.map(|b| b.error_terms()).unwrap_or_default()),
    );
    o.insert("host_extinction".into(), json!(c.host_extinction));
    o.insert(
        "distance_precision_pct".into(),
        json!(b.map(|b| b.distance_precision_pct)),
    );
    o.insert("floor_pct".into(), json!(b.map(|b| b.floor_pct)));
    o.insert("hours_needed".into(), num(d.hours_needed));
    o.insert("goal_met".into(), json!(c.goal_met));
    o.insert(
        "design_meets_requirement".into(),
        json!(d.meets_requirement),
    );
    o.insert("sparser_cadences".into(), json!(c.sparser));
    o.insert("cadence_search".into(), json!(c.cadence_search));
    o.insert("cadence_choice".into(), json!(c.cadence_choice()));
    o.insert(
        "verdict".into(),
        serde_json::to_value(&c.verdict).unwrap_or(Value::Null),
    );
    o.insert("cautions".into(), json!(c.cautions));
    o.insert("notes".into(), json!(c.notes));
    Value::Object(o)
}

fn print_table(
    c: &Chase,
    site: &rung::astro::site::Site,
    t: &Target,
    sky: &[Option<f64>],
    host: Option<&HostDistance>,
) {
    let o = |v: Option<f64>, dp: usize| super::opt(v, dp);
    super::outln!(
        "Chase of {} in {} from {} at {} (times local {})",
        c.target,
        c.bands.join(", "),
        t.discovered
            .map(|d| d.round_to_second().iso())
            .unwrap_or_default(),
        site.name,
        site.timezone.name()
    );
    if c.provisional {
        super::outln!("  PROVISIONAL: {}", c.classification.note);
    } else {
        super::outln!("  {}", c.classification.note);
    }
    super::outln!(
        "  B maximum expected {} at {:.2} mag (Δm15 {:.2}, B−V {:.2}, rise {:.1} d assumed)",
        c.t_max.round_to_second().iso(),
        c.placement.params.m_max,
        c.placement.params.dm15,
        c.placement.params.colour_mag,
        c.placement.params.rise_days
    );
    super::outln!(
        "  {:<10} {:>5}-{:<5} {:>5} {:>5} {:>5} {:>5} {:>6} {:>5} {:>6}  plan",
        "night",
        "from",
        "to",
        "airm",
        "moon°",
        "sun°",
        "sky",
        "phase",
        "B",
        "exp_s"
    );
    for (n, s) in c.nights.iter().zip(sky) {
        let mark = match (n.planned, n.classification) {
            (true, true) => "* spec ",
            (true, false) => "*      ",
            _ => "       ",
        };
        super::outln!(
            "  {:<10} {:>5}-{:<5} {:>5} {:>5.0} {:>5.0} {:>5} {:>6} {:>5} {:>6}  {}{}",
            n.night,
            super::local_hm(n.window_start, site),
            super::local_hm(n.window_end, site),
            o(n.best_airmass, 2),
            n.moon_separation_deg,
            n.solar_elongation_deg,
            o(*s, 1),
            o(n.phase_days, 1),
            o(n.expected_mag, 1),
            o(n.exptime_s, 0),
            mark,
            n.reason.clone().unwrap_or_default()
        );
    }
    super::outln!(
        "  last observable night: {}",
        c.last_night
            .map(|d| d.to_string())
            .unwrap_or_else(|| "none".into())
    );
    let d = &c.design;
    super::outln!(
        "  cadence: every {} night(s) around maximum, every {} on the decline: {} epochs in {}, {:.2} h with overheads{}",
        d.near_max_every,
        d.cadence_days,
        d.epochs.len(),
        c.bands.join(""),
        d.hours_needed,
        if c.classification.night.is_some() {
            " and the classification spectrum"
        } else {
            ""
        }
    );
    super::outln!("  why this cadence: {}", c.cadence_choice());
    if let Some(f) = d.fit {
        super::outln!(
            "  σ(t_max) {:.2} d   σ(peak) {:.3} mag   σ(Δm15) {:.3} mag   σ(B−V) {:.3} mag   σ(rise) {:.1} d",
            f.sigma_tmax_d,
            f.sigma_peak_mag,
            f.sigma_dm15,
            f.sigma_colour_mag,
            f.sigma_rise_d
        );
    }
    if let Some(h) = c.host_extinction {
        super::outln!(
            "  host dust from the colour curve: E(B−V) {:.2} ± {:.3} mag, A_V {:.2} ± {:.2} mag (R_V {})",
            h.ebv_mag,
            h.sigma_ebv_mag,
            h.av_mag,
            h.sigma_av_mag,
            h.r_v
        );
    }
    if let Some(b) = d.budget {
        let terms: Vec<String> = b
            .error_terms()
            .iter()
            .map(|e| {
                format!(
                    "{} {:.3}{}",
                    e.name,
                    e.sigma_mag,
                    if e.shared { " (shared)" } else { "" }
                )
            })
            .collect();
        super::outln!(
            "  standardized by {}: σ_μ {:.3} mag = {}",
            c.standardizer.relation.words(),
            b.sigma_mu_mag,
            terms.join(", ")
        );
        match c.role {
            Role::Calibrator {
                host_mu_mag,
                host_mu_err_mag,
            } => {
                let who =
                    host.map_or_else(|| "its host".to_string(), |h| format!("host {}", h.host));
                super::outln!(
                    "  calibrator: {who} at μ {host_mu_mag:.3} ± {host_mu_err_mag:.3} mag ({})",
                    host.map_or("given as a host distance modulus", |h| h.source.as_str())
                );
                if let Some(cal) = c.calibration() {
                    super::outln!(
                        "  calibrated peak absolute magnitude M_B {:.3} ± {:.3} mag (host distance {:.3}, the supernova's own {:.3})",
                        cal.peak_abs_mag,
                        cal.sigma_mag,
                        cal.sigma_host_mag,
                        cal.sigma_own_mag
                    );
                }
                super::outln!(
                    "  σ as distance {:.1}% (goal {}%, floor {:.1}%)",
                    b.distance_precision_pct,
                    c.goal_pct,
                    b.floor_pct
                );
            }
            _ => super::outln!(
                "  σ_d/d {:.1}% (goal {}%, floor {:.1}%)",
                b.distance_precision_pct,
                c.goal_pct,
                b.floor_pct
            ),
        }
    }
    super::outln!(
        "  verdict: {}{}",
        if c.provisional { "provisional, " } else { "" },
        c.verdict.text()
    );
    for s in &c.cautions {
        super::outln!("  CAUTION: {s}");
    }
    for s in c.notes.iter().filter(|n| !n.starts_with("PROVISIONAL")) {
        super::outln!("  note: {s}");
    }
}
