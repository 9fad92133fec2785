//! `rung parallax`: parallax factors through a range, the best nights for
//! epochs, and the precision a schedule buys (or what a goal takes).

use anyhow::{Context as _, Result, bail};
use rung::astro::frames::Context;
use rung::astro::time::{Instant, parse_instant};
use rung::astro::{pointing, sun_caution};
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::{Kind, Target};
use rung::ladder::Setting;
use rung::ladder::parallax::{FactorAxis, ParallaxConfig, ParallaxMethod, ParallaxPlan};
use rung::programme::{Report, Settings};
use serde_json::{Value, json};
use std::path::PathBuf;
use std::sync::Arc;

/// Arguments of `rung parallax`.
#[derive(clap::Args)]
#[command(mut_arg("goal_pct", |a| a.help("Distance-precision goal, percent (default: the target's goal_pct, else the programme's)")),)]
pub struct Args {
    #[command(flatten)]
    pub aim: super::args::MethodTarget,
    /// Expected parallax, mas (required with --ra/--dec; overrides the file's).
    #[arg(long, allow_hyphen_values = true)]
    pub parallax_mas: Option<f64>,
    /// Proper motion μα cos δ, mas/yr (with --ra/--dec).
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    pub pm_ra_masyr: f64,
    /// Proper motion μδ, mas/yr (with --ra/--dec).
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    pub pm_dec_masyr: f64,
    /// Magnitude in --band (required with --ra/--dec; overrides the file's).
    #[arg(long, allow_hyphen_values = true)]
    pub mag: Option<f64>,
    /// Photometric band (with --ra/--dec).
    #[arg(long, default_value = "I")]
    pub band: String,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    /// Factor to maximise: ra, dec or combined (default from config/parallax.toml).
    #[arg(long)]
    pub axis: Option<String>,
    /// Candidate nights have |factor| ≥ this fraction of the yearly extreme (0–1).
    #[arg(long, allow_hyphen_values = true)]
    pub fraction: Option<f64>,
    /// Hour-angle limit, hours (default ±1 h).
    #[arg(long, allow_hyphen_values = true)]
    pub ha_limit_h: Option<f64>,
    /// Airmass limit.
    #[arg(long, allow_hyphen_values = true)]
    pub max_airmass: Option<f64>,
    /// Signal-to-noise per proposed epoch.
    #[arg(long, allow_hyphen_values = true)]
    pub snr: Option<f64>,
    /// Epochs per season.
    #[arg(long)]
    pub epochs_per_season: Option<u32>,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// An epoch of your own (ISO 8601), repeatable: predicts the precision of these instead.
    #[arg(long = "epoch")]
    pub epoch: Vec<String>,
    /// A file of your own epochs, one ISO 8601 instant per line ('#' comments).
    #[arg(long)]
    pub epochs_file: Option<PathBuf>,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    /// Seeing FWHM, arcsec (default the instrument's typical seeing).
    #[arg(long, allow_hyphen_values = true)]
    pub seeing: Option<f64>,
    /// Parallax configuration (TOML with keys of config/parallax.toml; merged over it and your parallax.toml)
    #[arg(long)]
    pub config: Option<PathBuf>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

/// The method's configuration: the programme's (built-in, the user's file,
/// --config) with this command's own options over it.
fn config(a: &Args, st: &Settings) -> Result<ParallaxConfig> {
    let mut c = st
        .methods
        .get::<ParallaxMethod>()
        .context("no parallax method")?
        .cfg
        .clone();
    if let Some(x) = &a.axis {
        c.factor_axis = FactorAxis::parse(x)?;
    }
    if let Some(x) = a.fraction {
        c.factor_fraction = x;
    }
    if let Some(x) = a.ha_limit_h {
        c.ha_limit_h = x;
    }
    if let Some(x) = a.max_airmass {
        c.max_airmass = x;
    }
    if let Some(x) = a.snr {
        c.snr = x;
    }
    if let Some(x) = a.epochs_per_season {
        c.epochs_per_season = x;
        c.max_epochs_per_season = c.max_epochs_per_season.max(x);
    }
    // A value given as an option is refused under the option's name, not the
    // config key it overrides.
    let given = [
        ("factor_fraction", "--fraction", a.fraction.is_some()),
        ("ha_limit_h", "--ha-limit-h", a.ha_limit_h.is_some()),
        ("max_airmass", "--max-airmass", a.max_airmass.is_some()),
        ("snr", "--snr", a.snr.is_some()),
        (
            "epochs_per_season",
            "--epochs-per-season",
            a.epochs_per_season.is_some(),
        ),
    ];
    Ok(c.validated().map_err(|e| match e {
        rung::RungError::Invalid { what, why } => {
            let what = given
                .iter()
                .find(|(key, _, set)| *set && *key == what)
                .map_or(what, |(_, opt, _)| opt.to_string());
            rung::RungError::Invalid { what, why }
        }
        other => other,
    })?)
}

fn target(a: &Args) -> Result<Target> {
    let mut t = match (&a.aim.target, &a.aim.ra, &a.aim.dec) {
        (Some(n), _, _) => super::target_by_name(&a.aim.targets, n)?,
        (None, Some(r), Some(d)) => {
            let mut t = Target::plain("coordinates", parse_ra_deg(r)?, parse_dec_deg(d)?);
            t.kind = Kind::Parallax;
            t.pm_ra_masyr = a.pm_ra_masyr;
            t.pm_dec_masyr = a.pm_dec_masyr;
            t.band = a.band.clone();
            if a.parallax_mas.is_none() {
                bail!("give --parallax-mas (the expected parallax) with --ra and --dec");
            }
            if a.mag.is_none() {
                bail!("give --mag (and --band) with --ra and --dec: the exposure model needs them");
            }
            t
        }
        _ => bail!("give --target NAME (with --targets FILE), or --ra, --dec and --parallax-mas"),
    };
    // Options are held to the same bounds as the file's columns (rung::bounds).
    use rung::bounds::{MAG, PARALLAX_MAS, PM_MASYR};
    if let Some(p) = a.parallax_mas {
        t.parallax_mas = Some(PARALLAX_MAS.check_as("--parallax-mas", p)?);
    }
    if let Some(m) = a.mag {
        t.mag = Some(MAG.check_as("--mag", m)?);
    }
    PM_MASYR.check_as("--pm-ra-masyr", a.pm_ra_masyr)?;
    PM_MASYR.check_as("--pm-dec-masyr", a.pm_dec_masyr)?;
    Ok(t)
}

fn user_epochs(a: &Args) -> Result<Vec<Instant>> {
    let mut out = Vec::new();
    for (i, e) in a.epoch.iter().enumerate() {
        out.push(parse_instant(e).with_context(|| format!("--epoch number {}", i + 1))?);
    }
    if let Some(p) = &a.epochs_file {
        let text =
            std::fs::read_to_string(p).with_context(|| format!("{}: cannot read", p.display()))?;
        for (i, line) in text.lines().enumerate() {
            let l = line.split('#').next().unwrap_or("").trim();
            if l.is_empty() {
                continue;
            }
            out.push(parse_instant(l).with_context(|| format!("{}, line {}", p.display(), i + 1))?);
        }
        if out.is_empty() {
            bail!(
                "{}: the epoch list is empty: give at least three ISO 8601 instants",
                p.display()
            );
        }
    }
    Ok(out)
}

/// Run `rung parallax`.
pub fn run(a: Args) -> Result<()> {
    let programme = a.aim.targets.clone().unwrap_or_else(super::demo_programme);
    let st = super::settings(
        super::args::choices(
            Some(&a.site),
            Some(&a.instrument),
            Some(&a.limits),
            Some(&a.range),
            Some(&a.goal),
        ),
        Some(&programme),
        &[("parallax.toml", a.config.as_ref())],
    )?;
    let cfg = config(&a, &st)?;
    let mut tgt = target(&a)?;
    // The parallax method, whatever the target's kind (its expected parallax is checked).
    tgt.kind = Kind::Parallax;
    // A pulsator with a parallax (a ladder anchor) is measured at its mean
    // magnitude, as the ladder plans it (src/ladder/chain/build.rs).
    if tgt.mag.is_none() {
        tgt.mag = tgt.mean_mag;
    }
    if a.goal.goal_pct.is_some() {
        tgt.goal_pct = a.goal.goal_pct;
    }
    let mut st = st.with_method(Arc::new(ParallaxMethod::new(cfg.clone())?));
    if let Some(s) = a.seeing {
        st.photometer = st.photometer.clone().with_seeing(s)?;
    }
    let site = st.site.clone();
    let em = &st.photometer;
    let s = st.setting(&tgt);
    let times = user_epochs(&a)?;
    let goal = st.goal_for(&tgt);
    let (mode, plan) = if !times.is_empty() || a.epochs_file.is_some() {
        let m = ParallaxMethod::new(cfg.clone())?;
        let ep = m.epochs_at(&s, em, &times)?;
        ("epochs", m.plan_for(&s, em, ep)?)
    } else {
        let mode = if goal.is_some() { "goal" } else { "propose" };
        match rung::programme::report(&st, &tgt)? {
            Report::Parallax(p) => (mode, *p),
            _ => bail!("no parallax plan for {}", tgt.name),
        }
    };
    let mut cautions = Vec::new();
    for e in &plan.epochs {
        let ctx = Context::exact(&site, e.epoch.time)?;
        let p = pointing(&site, &ctx, &tgt.place());
        if let Some(c) = sun_caution(&site, &p) {
            cautions.push(format!("{}: {c}", e.epoch.time.iso()));
        }
    }
    if a.json {
        let v = to_json(
            goal,
            &site.name,
            &em.instrument.name,
            &tgt,
            mode,
            &cfg,
            &plan,
            &cautions,
            &s,
        )?;
        super::print_json(&v)?;
        return Ok(());
    }
    print_text(
        &site,
        &em.instrument.name,
        &tgt,
        mode,
        &cfg,
        &plan,
        &cautions,
        &s,
    );
    Ok(())
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

#[allow(clippy::too_many_arguments)]
fn to_json(
    goal_pct: Option<f64>,
    site: &str,
    instrument: &str,
    t: &Target,
    mode: &str,
    cfg: &ParallaxConfig,
    plan: &ParallaxPlan,
    cautions: &[String],
    s: &Setting,
) -> Result<Value> {
    let seasons_used = plan.epochs.iter().map(|e| e.season).max().unwrap_or(0);
    let series: Vec<Value> = plan
        .series
        .nights
        .iter()
        .map(|n| {
            json!({
                "night": n.night.to_string(),
                "pf_ra_au": n.pf_ra,
                "pf_dec_au": n.pf_dec,
                "pf_ra": n.pf_ra,
                "pf_dec": n.pf_dec,
                "factor_au": n.factor,
                "factor": n.factor,
                "observable": n.observable,
                "candidate": n.candidate,
                "best_time": n.best_time.map(|t| t.iso()),
                "hour_angle_h": n.hour_angle_h,
                "airmass": n.airmass,
                "usable_min": n.usable_min,
            })
        })
        .collect();
    let epochs: Vec<Value> = plan
        .epochs
        .iter()
        .map(|e| {
            json!({
                "time": e.epoch.time.iso(),
                "night": e.night.map(|d| d.to_string()),
                "season": e.season,
                "pf_ra_au": e.pf_ra,
                "pf_dec_au": e.pf_dec,
                "pf_ra": e.pf_ra,
                "pf_dec": e.pf_dec,
                "hour_angle_h": e.hour_angle_h,
                "airmass": e.epoch.airmass,
                "snr": e.epoch.snr,
                "exptime_s": e.epoch.exptime_s,
                "n_exposures": e.epoch.n_exposures,
                "visit_s": e.epoch.visit_s,
                "sigma_mas": e.sigma_mas,
                "frames": e.epoch.n_exposures,
                "sigma_terms": e.terms,
                "reference_snr": e.reference_snr,
                "tan_z": e.tan_z,
                "parallactic_angle_deg": e.parallactic_angle_deg,
                "dcr_ra_mas": e.dcr_mas[0],
                "dcr_dec_mas": e.dcr_mas[1],
                "dcr_zenith_mas": e.dcr_zenith_mas(plan.dcr.mas_per_tanz),
            })
        })
        .collect();
    let sol = plan.solution.as_ref();
    let pct = finite(plan.prediction.distance_precision_pct);
    let mut v = json!({
        "target": t.name,
        "site": site,
        "instrument": instrument,
        "mode": mode,
        "from": s.from.to_string(),
        "to": s.to.to_string(),
        "parallax_mas": plan.parallax_mas,
        "distance_pc": 1000.0 / plan.parallax_mas,
        "goal_pct": goal_pct,
        "axis": cfg.factor_axis.as_str(),
        "factor_fraction": cfg.factor_fraction,
        "ha_limit_h": cfg.ha_limit_h,
        "max_airmass": cfg.max_airmass,
        "min_alt_deg": s.limits.min_alt_deg,
        "sun_alt_deg": s.limits.sun_alt_deg,
        "floor_mas": cfg.floor_mas,
        "dcr_mas_per_tanz": cfg.dcr_mas_per_tanz,
        "image_motion_arcsec": cfg.image_motion_arcsec,
        "epoch_sun_alt_deg": cfg.sun_alt_deg.unwrap_or(s.limits.sun_alt_deg),
        "reference_frame": plan.reference,
        "dcr": plan.dcr,
        "exposure_rule": plan.exposure_rule,
        "ellipse": plan.ellipse,
        "yearly_extreme_au": plan.series.yearly_extreme,
        "threshold_au": plan.series.threshold,
    });
    let more = json!({
        "series": series,
        "seasons_available": plan.seasons_available,
        "seasons_used": seasons_used,
        "epochs": epochs,
        "sigma_parallax_mas": sol.map(|x| x.sigma_parallax_mas),
        "sigma_pm_masyr": sol.map(|x| x.sigma_pm_masyr),
        "sigma_pm_ra_masyr": sol.map(|x| x.sigma_pm_ra_masyr),
        "sigma_pm_dec_masyr": sol.map(|x| x.sigma_pm_dec_masyr),
        "corr_parallax_pm": sol.map(|x| x.corr_parallax_pm),
        "corr_parallax_pm_ra": sol.map(|x| x.corr_parallax_pm_ra),
        "corr_parallax_pm_dec": sol.map(|x| x.corr_parallax_pm_dec),
        "baseline_yr": sol.map(|x| x.baseline_yr),
        "min_baseline_yr": plan.min_baseline_yr,
        "dcr_bias_mas": plan.dcr_bias_mas,
        "absolute_correction_mas": plan.absolute_correction_mas,
        "sigma_parallax_total_mas": plan.sigma_parallax_total_mas,
        "error_terms": plan.prediction.error_terms,
        "distance_precision_pct": pct,
        "lutz_kelker_warning": pct.is_some_and(|p| p > cfg.lutz_kelker_pct),
        "hours_needed": plan.prediction.hours_needed,
        "verdict": plan.prediction.verdict,
        "verdict_reason": plan.verdict_reason,
        "goal_reach": plan.reach,
        "cautions": cautions,
        "notes": plan.prediction.notes,
    });
    if let (Some(o), Value::Object(m)) = (v.as_object_mut(), more) {
        o.extend(m);
    }
    Ok(v)
}

#[allow(clippy::too_many_arguments)]
fn print_text(
    site: &rung::astro::site::Site,
    instrument: &str,
    t: &Target,
    mode: &str,
    cfg: &ParallaxConfig,
    plan: &ParallaxPlan,
    cautions: &[String],
    s: &Setting,
) {
    let el = &plan.ellipse;
    super::outln!(
        "{} from {} with {}: ϖ = {:.2} mas (d ≈ {:.1} pc), nights {} to {} ({mode})",
        t.name,
        site.name,
        instrument,
        plan.parallax_mas,
        1000.0 / plan.parallax_mas,
        s.from,
        s.to
    );
    super::outln!(
        "  parallactic ellipse {:.2} × {:.2} mas, major axis at PA {:.1}°, ecliptic latitude {:+.1}°",
        el.semi_major_mas,
        el.semi_minor_mas,
        el.pa_major_deg,
        el.ecliptic_lat_deg
    );
    let obs = plan.series.nights.iter().filter(|n| n.observable).count();
    super::outln!(
        "  {} nights, {obs} observable within ±{:.1} h below airmass {:.2}; candidates at |P_{}| ≥ {:.2} au ({:.0} % of {:.3}): {} season(s)",
        plan.series.nights.len(),
        cfg.ha_limit_h,
        cfg.max_airmass,
        cfg.factor_axis.as_str(),
        plan.series.threshold,
        100.0 * cfg.factor_fraction,
        plan.series.yearly_extreme,
        plan.seasons_available
    );
    for season in plan.series.seasons(cfg.season_gap_d) {
        if let (Some(a), Some(b)) = (season.first(), season.last()) {
            super::outln!(
                "    season {} to {}: {} candidate night(s)",
                plan.series.nights[*a].night,
                plan.series.nights[*b].night,
                season.len()
            );
        }
    }
    let rf = &plan.reference;
    let src = |x: rung::ladder::parallax::astrometry::Source| match x {
        rung::ladder::parallax::astrometry::Source::Given => "given",
        rung::ladder::parallax::astrometry::Source::Estimated => "estimated",
    };
    if rf.count > 0.0 {
        super::outln!(
            "  reference frame: {:.0} stars ({}) of {:.1} mag ({}) and V−I {:.1} ({}), {:.0}″ from the target on average; Galactic latitude {:+.0}°",
            rf.count,
            src(rf.count_source),
            rf.mag,
            src(rf.mag_source),
            rf.color_vi_mag,
            src(rf.color_source),
            rf.separation_arcsec,
            rf.galactic_lat_deg
        );
        super::outln!(
            "  DCR {:+.1} mas per tan z against the frame (effective wavelengths {:.0} and {:.0} Å)",
            plan.dcr.mas_per_tanz,
            plan.dcr.target_lambda_angstrom,
            plan.dcr.reference_lambda_angstrom
        );
    }
    if let Some(l) = plan.exposure_rule.levels.first() {
        super::outln!(
            "  exposure per epoch: {:.0} s in {} frame(s) (the most precision per telescope hour is at {:.0} s; SNR {:.0} needs {}); levels tried: {}",
            l.exptime_s,
            l.frames,
            plan.exposure_rule.best_rate_exptime_s,
            cfg.snr,
            plan.exposure_rule
                .min_snr_exptime_s
                .map_or("more than the longest epoch".to_string(), |t| format!(
                    "{t:.0} s"
                )),
            plan.exposure_rule
                .levels
                .iter()
                .map(|l| format!("{:.0} s", l.exptime_s))
                .collect::<Vec<_>>()
                .join(", ")
        );
    }
    if !plan.epochs.is_empty() {
        super::outln!(
            "  epochs (σ per coordinate = centroid, reference frame, image motion, refraction residual, floor in quadrature; DCR the systematic shift):"
        );
        super::outln!(
            "    {:<20} {:>3} {:>6} {:>6} {:>5} {:>5} {:>5} {:>6} {:>3} {:>5} {:>5} {:>5} {:>5} {:>6}",
            "time (UTC)",
            "ssn",
            "P_ra",
            "P_dec",
            "HA h",
            "X",
            "SNR",
            "exp s",
            "n",
            "σ mas",
            "cent",
            "ref",
            "motn",
            "DCR"
        );
        for e in &plan.epochs {
            super::outln!(
                "    {:<20} {:>3} {:>+6.2} {:>+6.2} {:>+5.2} {:>5.2} {:>5.0} {:>6.0} {:>3} {:>5.2} {:>5.2} {:>5.2} {:>5.2} {:>+6.2}",
                e.epoch.time.round_to_second().iso(),
                e.season,
                e.pf_ra,
                e.pf_dec,
                e.hour_angle_h,
                e.epoch.airmass,
                e.epoch.snr,
                e.epoch.exptime_s,
                e.epoch.n_exposures,
                e.sigma_mas,
                e.terms.centroid_mas,
                e.terms.reference_mas,
                e.terms.image_motion_mas,
                e.dcr_zenith_mas(plan.dcr.mas_per_tanz)
            );
        }
    }
    if let Some(sol) = &plan.solution {
        super::outln!(
            "  σ_ϖ = {:.2} mas (fit), DCR bias bound {:.2} mas, relative-to-absolute correction {:.2} mas: {:.2} mas in all",
            sol.sigma_parallax_mas,
            plan.dcr_bias_mas.unwrap_or(0.0).abs(),
            plan.absolute_correction_mas,
            plan.sigma_parallax_total_mas.unwrap_or(f64::NAN)
        );
        super::outln!(
            "  σ_μ = {:.2} mas/yr (RA {:.2}, Dec {:.2}), ϖ–μ correlation {:+.2}, baseline {:.2} yr (a reachable plan needs {:.1})",
            sol.sigma_pm_masyr,
            sol.sigma_pm_ra_masyr,
            sol.sigma_pm_dec_masyr,
            sol.corr_parallax_pm,
            sol.baseline_yr,
            plan.min_baseline_yr
        );
        super::outln!(
            "  σ_d/d = {:.2} % ({}), {:.2} telescope hours with overheads",
            plan.prediction.distance_precision_pct,
            plan.prediction
                .error_terms
                .iter()
                .map(|t| format!("{} {} %", t.name, rung::output::num(t.distance_pct, 2)))
                .collect::<Vec<_>>()
                .join(", "),
            plan.prediction.hours_needed
        );
    }
    super::outln!(
        "  verdict: {} ({})",
        plan.prediction.verdict.text(),
        plan.verdict_reason
    );
    for n in &plan.prediction.notes {
        super::outln!("  note: {n}");
    }
    for c in cautions {
        super::outln!("  {c}");
    }
}
