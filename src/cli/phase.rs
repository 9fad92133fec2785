//! `rung phase`: phase coverage of a pulsating star over a range of nights, a
//! visit plan covering its phase bins, and the distance precision it buys.

use anyhow::{Context as _, Result, bail};
use rung::astro::bary::bjd_tdb;
use rung::astro::time::parse_instant;
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::{BANDS, Kind, Target};
use rung::ladder::field::FieldConfig;
use rung::ladder::pulsator::{PhaseReport, PulsatorMethod};
use rung::programme::Report;
use serde_json::{Map, Value, json};
use std::sync::Arc;

/// Arguments of `rung phase`.
#[derive(clap::Args)]
#[command(
    mut_arg("target", |a| a.help("A pulsator by name from --targets (default: the demo programme)")),
    mut_arg("targets", |a| a.help("Targets file (CSV or TOML) for --target")),
    mut_arg("goal_pct", |a| a.help("Distance-precision goal, percent (default: the target's goal_pct, else the programme's)")),
)]
pub struct Args {
    #[command(flatten)]
    pub aim: super::args::MethodTarget,
    /// A field (host galaxy or cluster, a target of kind field) by name from
    /// --targets: its pointings, the visits that serve all its stars, and the
    /// field's distance with its terms (a field named by --target is taken as this).
    #[arg(long, conflicts_with_all = ["target", "ra", "dec", "period_d", "epoch_max_bjd"])]
    pub field: Option<String>,
    /// Pulsation period, days (overrides the target's).
    #[arg(long, allow_hyphen_values = true)]
    pub period_d: Option<f64>,
    /// Epoch of maximum light, BJD_TDB (overrides the target's).
    #[arg(long, allow_hyphen_values = true)]
    pub epoch_max_bjd: Option<f64>,
    /// Period uncertainty, days.
    #[arg(long, allow_hyphen_values = true)]
    pub period_err_d: Option<f64>,
    /// Peak-to-peak amplitude, mag.
    #[arg(long, allow_hyphen_values = true)]
    pub amplitude_mag: Option<f64>,
    /// Mean magnitude in the band, mag.
    #[arg(long, allow_hyphen_values = true)]
    pub mean_mag: Option<f64>,
    /// Photometric band (U, B, V, R, I, J, H, K).
    #[arg(long)]
    pub band: Option<String>,
    /// Class of pulsator, which picks its relation (cepheid, rrlyrae, mira; default: the target's, else inferred from the period where unambiguous).
    #[arg(long)]
    pub class: Option<String>,
    /// Metallicity [Fe/H], dex (default: the target's, else the class's assumed value).
    #[arg(long, allow_hyphen_values = true)]
    pub feh_dex: Option<f64>,
    /// Uncertainty of the metallicity, dex.
    #[arg(long, allow_hyphen_values = true)]
    pub feh_err_dex: Option<f64>,
    /// Foreground extinction in the band, mag.
    #[arg(long, visible_alias = "extinction", allow_hyphen_values = true)]
    pub extinction_mag: Option<f64>,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    /// Number of nights from the first (instead of --to)
    #[arg(long, conflicts_with = "to")]
    pub nights: Option<u32>,
    /// Phase bins to cover (default from config/pulsator.toml: 10).
    #[arg(long)]
    pub bins: Option<usize>,
    /// Fourier harmonics of the light-curve fit (default from config: 3).
    #[arg(long)]
    pub harmonics: Option<usize>,
    /// Per-point signal-to-noise exposures are sized for (default from config: 100).
    #[arg(long, allow_hyphen_values = true)]
    pub snr: Option<f64>,
    /// Warn when coverage needs more nights than this (default from config: 10).
    #[arg(long)]
    pub max_nights: Option<usize>,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Also give the phase at this instant (ISO 8601 or 'now').
    #[arg(long)]
    pub at: Option<String>,
    /// Plan a period search over MIN,MAX days (a candidate needs no period or epoch).
    #[arg(long, value_name = "MIN,MAX")]
    pub period_range: Option<String>,
    /// Observed times of maximum, BJD_TDB[:ERR_D] separated by spaces or commas: the ephemeris is refitted to them (overrides the target's maxima_bjd).
    #[arg(long, value_name = "LIST")]
    pub maxima: Option<String>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

/// The target `rung phase` plans, with the notes its options call for.
fn build_target(a: &Args, fields: &FieldConfig) -> Result<(Target, Vec<String>)> {
    let mut notes = Vec::new();
    let mut t = match (&a.aim.target, &a.aim.ra, &a.aim.dec) {
        (Some(n), _, _) => {
            let t = super::target_by_name(&a.aim.targets, n)?;
            if t.kind != Kind::Pulsator && a.period_d.is_none() {
                bail!(
                    "target '{}' is a {} target, not a pulsator; give --period-d and --epoch-max-bjd to treat it as one",
                    t.name,
                    t.kind.as_str()
                );
            }
            // A star of a field takes the field's metallicity where its row
            // gives none (the field's plan and the ladder do the same).
            let file = a.aim.targets.clone().unwrap_or_else(super::demo_programme);
            let all = super::load_targets(&file)?;
            let (t, note) = rung::ladder::field::with_field_metallicity(&all, &t, fields);
            notes.extend(note);
            t
        }
        (None, Some(r), Some(d)) => {
            let mut t = Target::plain("coordinates", parse_ra_deg(r)?, parse_dec_deg(d)?);
            t.kind = Kind::Pulsator;
            t
        }
        _ => bail!(
            "give --target NAME (with --targets FILE), or --ra, --dec, --period-d and --epoch-max-bjd"
        ),
    };
    t.kind = Kind::Pulsator;
    // Options are held to the same bounds as the file's columns (rung::bounds).
    use rung::bounds::{AMPLITUDE_MAG, EXTINCTION_MAG, MAG, PERIOD_D};
    PERIOD_D.check_opt_as("--period-d", a.period_d)?;
    AMPLITUDE_MAG.check_opt_as("--amplitude-mag", a.amplitude_mag)?;
    MAG.check_opt_as("--mean-mag", a.mean_mag)?;
    EXTINCTION_MAG.check_opt_as("--extinction-mag", a.extinction_mag)?;
    if let Some(e) = a.period_err_d
        && let Some(why) = rung::bounds::period_err_why_not(e, a.period_d.or(t.period_d))
    {
        bail!(rung::RungError::invalid("--period-err-d", why));
    }
    if a.period_d.is_some() {
        t.period_d = a.period_d;
    }
    if a.epoch_max_bjd.is_some() {
        t.epoch_max_bjd = a.epoch_max_bjd;
    }
    if a.period_err_d.is_some() {
        t.period_err_d = a.period_err_d;
    }
    if a.amplitude_mag.is_some() {
        t.amplitude_mag = a.amplitude_mag;
    }
    if a.mean_mag.is_some() {
        t.mean_mag = a.mean_mag;
    }
    if let Some(x) = a.extinction_mag {
        t.extinction_mag = x;
    }
    if let Some(b) = &a.band {
        let up = b.trim().to_ascii_uppercase();
        if !BANDS.contains(&up.as_str()) {
            bail!("--band '{b}' is not one of {}", BANDS.join(", "));
        }
        // The target's extinction is in its own band: carried to the new
        // band by the Cardelli, Clayton & Mathis (1989) law, R_V = 3.1.
        if up != t.band && a.extinction_mag.is_none() && t.extinction_mag > 0.0 {
            let bands = rung::sky::BandSet::load()?;
            let l0 = bands.get(&t.band)?.lambda_eff_angstrom;
            let l1 = bands.get(&up)?.lambda_eff_angstrom;
            use rung::sky::dust::ccm89_a_over_av;
            let a1 = t.extinction_mag * ccm89_a_over_av(l1, 3.1)? / ccm89_a_over_av(l0, 3.1)?;
            notes.push(format!(
                "extinction_mag {} in {} taken to {up} as {a1:.3} mag (Cardelli, Clayton & Mathis 1989, R_V = 3.1); give --extinction-mag to set it",
                t.extinction_mag, t.band
            ));
            t.extinction_mag = a1;
        }
        t.band = up;
    }
    if let Some(c) = &a.class {
        let c = rung::ladder::pulsator::PulsatorClass::parse(c).map_err(|e| match e {
            rung::RungError::Invalid { why, .. } => rung::RungError::invalid("--class", why),
            other => other,
        })?;
        t.class = c.as_str().to_string();
    }
    use rung::bounds::{FEH_DEX, FEH_ERR_DEX};
    if let Some(f) = FEH_DEX.check_opt_as("--feh-dex", a.feh_dex)? {
        t.feh_dex = Some(f);
    }
    if let Some(f) = FEH_ERR_DEX.check_opt_as("--feh-err-dex", a.feh_err_dex)? {
        t.feh_err_dex = Some(f);
    }
    if let Some(m) = &a.maxima {
        if let Err(why) = rung::io::kinds::maxima_list(m) {
            bail!(rung::RungError::invalid("--maxima", why));
        }
        t.maxima_bjd = m.trim().to_string();
    }
    if a.period_range.is_some() && (t.period_d.is_none() || t.epoch_max_bjd.is_none()) {
        // A candidate: only its period search is planned.
        return Ok((t, notes));
    }
    if t.period_d.is_none() {
        bail!(
            "no period for '{}': give --period-d DAYS (a pulsator needs its period), or --period-range MIN,MAX to plan a search",
            t.name
        );
    }
    if t.epoch_max_bjd.is_none() {
        bail!(
            "no epoch for '{}': give --epoch-max-bjd, the BJD_TDB of a maximum of light",
            t.name
        );
    }
    Ok((t, notes))
}

/// " + 0.59" or " − 4.05" for a term of a formula.
fn opt_num(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

/// Run `rung phase`.
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
        &[],
    )?;
    if let Some(n) = a.nights {
        if n == 0 {
            bail!("--nights must be at least 1");
        }
        // The last night must lie in rung's span, as a --to would (a count
        // past the calendar's end used to panic).
        use rung::astro::time::{VALID_FROM, VALID_TO, check_date};
        st.to = st
            .from
            .checked_add_days(chrono::Days::new(n as u64 - 1))
            .and_then(|d| check_date(d).ok())
            .with_context(|| {
                format!(
                    "--nights {n} from {} ends past rung's valid span ({VALID_FROM} to {VALID_TO}): give fewer nights",
                    st.from
                )
            })?;
    }
    let mut m = st
        .methods
        .get::<PulsatorMethod>()
        .context("no pulsator method")?
        .clone();
    if let Some(b) = a.bins {
        m.bins = b;
    }
    if let Some(k) = a.harmonics {
        m.harmonics = k;
    }
    if let Some(s) = a.snr {
        m.snr = s;
    }
    if let Some(n) = a.max_nights {
        m.max_nights = n;
    }
    if let Some(text) = &a.period_range {
        m.discover_range = Some(parse_period_range(text)?);
    }
    let st = st.with_method(Arc::new(m.clone()));
    // A field: by --field, or a --target that names one.
    let field_name = match (&a.field, &a.aim.target) {
        (Some(f), _) => Some(f.clone()),
        (None, Some(t)) if a.period_d.is_none() => {
            let ts = super::load_targets(&programme)?;
            ts.iter()
                .find(|x| &x.name == t && x.kind == Kind::Field)
                .map(|x| x.name.clone())
        }
        _ => None,
    };
    if let Some(name) = field_name {
        // A field's stars keep their own values: a star's option would be
        // silently ignored, so it is refused.
        let star_only: Vec<&str> = [
            ("--period-err-d", a.period_err_d.is_some()),
            ("--amplitude-mag", a.amplitude_mag.is_some()),
            ("--mean-mag", a.mean_mag.is_some()),
            ("--band", a.band.is_some()),
            ("--class", a.class.is_some()),
            ("--feh-dex", a.feh_dex.is_some()),
            ("--feh-err-dex", a.feh_err_dex.is_some()),
            ("--extinction-mag", a.extinction_mag.is_some()),
            ("--at", a.at.is_some()),
            ("--maxima", a.maxima.is_some()),
            ("--period-range", a.period_range.is_some()),
        ]
        .into_iter()
        .filter_map(|(f, given)| given.then_some(f))
        .collect();
        if !star_only.is_empty() {
            bail!(
                "{} describe(s) one star; field {name} plans its stars with their own values from {} (the field's [Fe/H] is its row's feh_dex, feh_err_dex)",
                star_only.join(", "),
                programme.display()
            );
        }
        return run_field(&st, &programme, &name, a.goal.goal_pct, a.json);
    }
    let (mut target, option_notes) = build_target(&a, &st.fields)?;
    if let (Some((lo, hi)), true) = (
        m.discover_range,
        target.period_d.is_none() || target.epoch_max_bjd.is_none(),
    ) {
        return run_candidate(&st, &m, target, option_notes, lo, hi, a.json);
    }
    if a.goal.goal_pct.is_some() {
        target.goal_pct = a.goal.goal_pct;
    }
    let site = st.site.clone();
    let mut r = match rung::programme::report(&st, &target)? {
        Report::Phase(r) => *r,
        _ => bail!("no phase report for {}", target.name),
    };
    r.notes.splice(0..0, option_notes);
    let goal = st.goal_for(&target);
    let at = match &a.at {
        Some(text) => {
            let t = match text.trim() {
                "now" => super::now()?,
                x => parse_instant(x).context("--at")?,
            };
            let b = bjd_tdb(&site, t, &r.star.place)?;
            Some((t, b))
        }
        None => None,
    };
    if a.json {
        print_json(&st, &target, &m, &r, goal, at)?;
    } else {
        print_text(&site, &target, &m, &r, goal, at);
    }
    Ok(())
}

/// `MIN,MAX` (or `MIN..MAX`) days, each a period rung accepts, MIN below MAX.
fn parse_period_range(text: &str) -> Result<(f64, f64)> {
    let bad = |why: String| rung::RungError::invalid("--period-range", why);
    let (a, b) = text
        .split_once("..")
        .or_else(|| text.split_once(','))
        .ok_or_else(|| bad(format!("'{text}' is not MIN,MAX in days, e.g. 0.3,5")))?;
    let num = |x: &str| -> Result<f64> {
        let v: f64 = x
            .trim()
            .parse()
            .map_err(|_| bad(format!("'{}' is not a number of days", x.trim())))?;
        rung::bounds::PERIOD_D.check_as("--period-range", v)?;
        Ok(v)
    };
    let (lo, hi) = (num(a)?, num(b)?);
    if lo >= hi {
        bail!(bad(format!(
            "the shortest period {lo} d must be below the longest {hi} d"
        )));
    }
    Ok((lo, hi))
}

/// A candidate with a period range only: its period search.
fn run_candidate(
    st: &rung::programme::Settings,
    m: &PulsatorMethod,
    mut target: Target,
    mut notes: Vec<String>,
    lo: f64,
    hi: f64,
    json_out: bool,
) -> Result<()> {
    // The search needs no ephemeris; the star's other fields are checked
    // as usual with a placeholder period inside the range.
    target.period_d = Some((lo * hi).sqrt());
    target.epoch_max_bjd = Some(2_451_545.0);
    target.period_err_d = None;
    target.maxima_bjd.clear();
    let star = rung::ladder::pulsator::Star::from_target(&target)?;
    let s = st.setting(&target);
    let d = m.discover(&s, Some(&st.photometer), &star, lo, hi)?;
    notes.extend(d.notes.iter().cloned());
    if json_out {
        let o = json!({
            "target": target.name,
            "site": st.site.name,
            "instrument": st.instrument().name,
            "candidate": true,
            "period_min_d": lo,
            "period_max_d": hi,
            "band": star.band,
            "discovery": serde_json::to_value(&d)?,
            "notes": notes,
        });
        super::print_json(&o)?;
    } else {
        super::outln!(
            "{}: candidate, period {lo}–{hi} d, from {}",
            target.name,
            st.site.name
        );
        print_discovery(&d);
        for n in &notes {
            super::outln!("note: {n}");
        }
    }
    Ok(())
}

/// The period-search section of the text output.
fn print_discovery(d: &rung::ladder::pulsator::DiscoveryPlan) {
    super::outln!(
        "Period search {:.5}–{:.5} d: {} observations over {:.1} d (geometric spacing, base {:.2}); expected σ_P {:.2e} d at {:.5} d, {:.2e} d at {:.5} d",
        d.period_min_d,
        d.period_max_d,
        d.bjd_tdb.len(),
        d.span_d,
        d.base,
        d.period_err_at_min_d,
        d.period_min_d,
        d.period_err_at_max_d,
        d.period_max_d
    );
    super::outln!(
        "  alias-free: {} ({} of {} simulated stars recovered); spectral window's tallest sidelobe {:.2} at {:.3} cycles/day (one visit a night: {:.2})",
        if d.alias_free { "yes" } else { "NO" },
        d.recovered,
        d.trials,
        d.max_sidelobe,
        d.max_sidelobe_cpd,
        d.nightly_max_sidelobe
    );
    let peaks: Vec<String> = d
        .alias_peaks
        .iter()
        .map(|p| {
            format!(
                "{:.5} d {:.0} %{}",
                p.period_d,
                100.0 * p.relative,
                if p.true_peak { " (true)" } else { "" }
            )
        })
        .collect();
    super::outln!(
        "  periodogram of a {:.5}-d star over these times: {}",
        d.test_period_d,
        peaks.join(" · ")
    );
    let steps: Vec<String> = d
        .progress
        .iter()
        .filter(|p| p.epochs % 6 == 0 || p.epochs == d.bjd_tdb.len())
        .map(|p| format!("{}: {:.2e}", p.epochs, p.period_err_at_max_d))
        .collect();
    super::outln!(
        "  σ_P at {:.5} d as observations accumulate: {}",
        d.period_max_d,
        steps.join(", ")
    );
    super::outln!("  {:<20} {:>14}", "UTC", "BJD_TDB");
    for (t, b) in d.times_utc.iter().zip(&d.bjd_tdb) {
        super::outln!("  {:<20} {:>14.5}", t, b);
    }
}

/// The O−C section of the text output.
fn print_update(u: &rung::ladder::pulsator::EphemerisUpdate) {
    super::outln!(
        "Ephemeris from {} maxima: P = {:.7} ± {:.7} d (was {} ± {} d), epoch BJD_TDB {:.5} ± {:.5} d{}",
        u.points.len(),
        u.new.period_d,
        u.new.period_err_d,
        u.old.period_d,
        u.old.period_err_d,
        u.new.epoch_max_bjd,
        u.new.epoch_err_d,
        u.reduced_chi2
            .map(|r| format!(", χ²/ν {r:.2}"))
            .unwrap_or_default()
    );
    super::outln!(
        "  old ephemeris as prior: {}",
        if u.prior_used { "used" } else { "not used" }
    );
    super::outln!(
        "  {:>6} {:>14} {:>10} {:>10}",
        "cycle",
        "BJD_TDB",
        "O−C old d",
        "O−C new d"
    );
    for p in &u.points {
        super::outln!(
            "  {:>6} {:>14.5} {:>10.5} {:>10.5}",
            p.cycle,
            p.bjd,
            p.o_minus_c_old_d,
            p.o_minus_c_new_d
        );
    }
    let steps: Vec<String> = u
        .progress
        .iter()
        .map(|p| {
            format!(
                "{}: σ_P {:.2e}, σ_E {:.4}{}",
                p.maxima,
                p.period_err_d,
                p.epoch_err_d,
                if p.prior_used { " (with prior)" } else { "" }
            )
        })
        .collect();
    super::outln!("  as maxima accumulate: {}", steps.join(" · "));
}

#[allow(clippy::too_many_arguments)]
fn print_json(
    st: &rung::programme::Settings,
    target: &Target,
    m: &PulsatorMethod,
    r: &PhaseReport,
    goal: Option<f64>,
    at: Option<(rung::astro::time::Instant, rung::astro::bary::Bjd)>,
) -> Result<()> {
    let e = &r.star.ephemeris;
    let mut o = Map::new();
    let site = &st.site;
    o.insert("target".into(), json!(target.name));
    o.insert("site".into(), json!(site.name));
    o.insert("instrument".into(), json!(st.instrument().name));
    o.insert("period_d".into(), json!(e.period_d));
    o.insert("epoch_max_bjd".into(), json!(e.epoch_max_bjd));
    o.insert("period_err_d".into(), json!(e.period_err_d));
    o.insert("band".into(), json!(r.star.band));
    o.insert("mean_mag".into(), json!(r.star.mean_mag));
    o.insert("amplitude_mag".into(), json!(r.star.amplitude_mag));
    o.insert("extinction_mag".into(), json!(r.star.extinction_mag));
    o.insert("min_alt_deg".into(), json!(st.limits.min_alt_deg));
    o.insert("sun_alt_deg".into(), json!(st.limits.sun_alt_deg));
    o.insert("bins".into(), json!(r.plan.bins));
    o.insert("harmonics".into(), json!(m.harmonics));
    // Nights: one row per window, and one row with nulls for a night without one.
    let mut rows: Vec<(chrono::NaiveDate, Value)> = r
        .windows
        .iter()
        .map(|w| {
            (
                w.night,
                json!({
                    "night": w.night.to_string(),
                    "window_start": w.start.iso(),
                    "window_end": w.end.iso(),
                    "bjd_tdb_start": w.bjd_start.jd(),
                    "bjd_tdb_end": w.bjd_end.jd(),
                    "phase_start": w.phase_start,
                    "phase_end": w.phase_end,
                    "phase_span": w.span_cycles,
                    "observable_hours": w.end.seconds_since(&w.start) / 3600.0,
                }),
            )
        })
        .collect();
    for d in &r.dark_nights {
        rows.push((
            *d,
            json!({
                "night": d.to_string(),
                "window_start": null, "window_end": null,
                "bjd_tdb_start": null, "bjd_tdb_end": null,
                "phase_start": null, "phase_end": null,
                "phase_span": 0.0, "observable_hours": 0.0,
            }),
        ));
    }
    rows.sort_by_key(|x| x.0);
    o.insert(
        "nights".into(),
        Value::Array(rows.into_iter().map(|x| x.1).collect()),
    );
    let visits: Vec<Value> = r
        .plan
        .visits
        .iter()
        .enumerate()
        .map(|(i, v)| {
            let mut x = Map::new();
            x.insert("time".into(), json!(v.time.iso()));
            x.insert("night".into(), json!(v.night.to_string()));
            x.insert("bjd_tdb".into(), json!(v.bjd.jd()));
            x.insert("phase".into(), json!(v.phase));
            x.insert("bin".into(), json!(v.bin));
            if let Some(ep) = r.epochs.get(i) {
                x.insert("exptime_s".into(), json!(ep.exptime_s));
                x.insert("n_exposures".into(), json!(ep.n_exposures));
                x.insert("snr".into(), json!(ep.snr));
                x.insert("airmass".into(), opt_num(ep.airmass));
                x.insert("visit_s".into(), json!(ep.visit_s));
            }
            Value::Object(x)
        })
        .collect();
    o.insert("visits".into(), Value::Array(visits));
    o.insert("bins_covered".into(), json!(r.plan.bins_covered));
    o.insert("missing_bins".into(), json!(r.plan.missing_bins));
    o.insert("nights_needed".into(), json!(r.plan.nights_needed()));
    o.insert(
        "nights_used".into(),
        json!(
            r.plan
                .nights
                .iter()
                .map(|d| d.to_string())
                .collect::<Vec<_>>()
        ),
    );
    o.insert("beat_period_d".into(), json!(r.alias.beat_period_d));
    o.insert("alias_m".into(), json!(r.alias.m));
    o.insert("alias_k".into(), json!(r.alias.k));
    o.insert("phase_sigma".into(), json!(r.phase_sigma));
    o.insert("phase_sigma_start".into(), json!(r.phase_sigma_start));
    o.insert("stale_ephemeris".into(), json!(r.stale));
    o.insert("epoch_err_d".into(), json!(e.epoch_err_d));
    o.insert(
        "ephemeris_update".into(),
        serde_json::to_value(&r.star.ephemeris_update)?,
    );
    o.insert("discovery".into(), serde_json::to_value(&r.discovery)?);
    if let Some((t, b)) = at {
        o.insert("at".into(), json!(t.iso()));
        o.insert("bjd_tdb_at".into(), json!(b.jd()));
        o.insert("phase_at".into(), json!(e.phase(&b)));
        o.insert("phase_sigma_at".into(), json!(e.phase_sigma(&b)));
    }
    let p = r.prediction.as_ref();
    o.insert(
        "distance_precision_pct".into(),
        p.map(|p| opt_num(p.distance_precision_pct))
            .unwrap_or(Value::Null),
    );
    o.insert(
        "hours_needed".into(),
        p.map(|p| json!(p.hours_needed)).unwrap_or(Value::Null),
    );
    o.insert("goal_pct".into(), json!(goal));
    o.insert("points_needed".into(), json!(r.plan.bins));
    o.insert("snr_per_point".into(), json!(r.snr_per_point));
    o.insert(
        "exptime_per_point_s".into(),
        r.epochs
            .iter()
            .map(|e| e.exptime_s)
            .fold(None, |m: Option<f64>, x| Some(m.map_or(x, |m| m.max(x))))
            .map(opt_num)
            .unwrap_or(Value::Null),
    );
    o.insert(
        "verdict".into(),
        p.map(|p| serde_json::to_value(&p.verdict))
            .transpose()?
            .unwrap_or(Value::Null),
    );
    let b = r.budget.as_ref();
    for (k, f) in [
        ("distance_modulus_mag", b.map(|b| b.distance_modulus_mag)),
        ("distance_pc", b.map(|b| b.distance_pc)),
        ("abs_mag", b.map(|b| b.abs_mag)),
        ("sigma_mu_mag", b.map(|b| b.sigma_mu_mag)),
        ("sigma_mean_mag", b.map(|b| b.sigma_mean_mag)),
        ("sigma_mean_rule_mag", r.sigma_mean_rule_mag),
        ("sigma_pl_mag", b.map(|b| b.sigma_pl_mag)),
        ("sigma_ext_mag", b.map(|b| b.sigma_ext_mag)),
        ("sigma_cal_mag", b.map(|b| b.sigma_cal_mag)),
        ("floor_pct", b.map(|b| b.floor_pct)),
    ] {
        o.insert(k.into(), f.map(opt_num).unwrap_or(Value::Null));
    }
    for (k, f) in [
        ("sigma_scatter_mag", b.map(|b| b.sigma_scatter_mag)),
        ("sigma_zero_point_mag", b.map(|b| b.sigma_zero_point_mag)),
        ("sigma_feh_mag", b.map(|b| b.sigma_feh_mag)),
    ] {
        o.insert(k.into(), f.map(opt_num).unwrap_or(Value::Null));
    }
    match &r.relation {
        Some(rel) => {
            o.insert("class".into(), json!(rel.relation.class));
            o.insert("class_from".into(), json!(rel.class_from));
            o.insert("feh_dex".into(), json!(rel.feh_dex));
            o.insert("feh_err_dex".into(), json!(rel.feh_err_dex));
            o.insert("feh_assumed".into(), json!(rel.feh_assumed));
            o.insert("relation".into(), serde_json::to_value(&rel.relation)?);
        }
        None => {
            o.insert(
                "class".into(),
                json!(r.star.class.map(|c| c.as_str().to_string())),
            );
            o.insert("class_from".into(), Value::Null);
            o.insert("feh_dex".into(), json!(r.star.feh_dex));
            o.insert("feh_err_dex".into(), json!(r.star.feh_err_dex));
            o.insert("feh_assumed".into(), Value::Null);
            o.insert("relation".into(), Value::Null);
        }
    }
    o.insert(
        "mean_from".into(),
        json!(r.mean.as_ref().map(|m| m.from.clone())),
    );
    o.insert("mean".into(), serde_json::to_value(&r.mean)?);
    o.insert(
        "error_terms".into(),
        serde_json::to_value(
            r.prediction
                .as_ref()
                .map(|p| p.error_terms.clone())
                .unwrap_or_default(),
        )?,
    );
    o.insert("cautions".into(), json!(r.cautions));
    o.insert("notes".into(), json!(r.notes));
    super::print_json(&Value::Object(o))?;
    Ok(())
}

fn print_text(
    site: &rung::astro::site::Site,
    target: &Target,
    m: &PulsatorMethod,
    r: &PhaseReport,
    goal: Option<f64>,
    at: Option<(rung::astro::time::Instant, rung::astro::bary::Bjd)>,
) {
    let e = &r.star.ephemeris;
    super::outln!(
        "{} (P = {} d, E0 = BJD_TDB {}, ±{} d) from {}; times local {} / UTC",
        target.name,
        e.period_d,
        e.epoch_max_bjd,
        e.period_err_d,
        site.name,
        site.timezone.name()
    );
    if let Some((t, b)) = at {
        super::outln!(
            "  at {}: BJD_TDB {:.5}, phase {:.3} ± {:.3}",
            t.iso(),
            b.jd(),
            e.phase(&b),
            e.phase_sigma(&b)
        );
    }
    super::outln!(
        "  {:<10} {:>13} {:>13}   {:>6} → {:<6} {:>6}",
        "night",
        "window local",
        "window UTC",
        "phase",
        "",
        "span"
    );
    let mut rows: Vec<(chrono::NaiveDate, String)> = r
        .windows
        .iter()
        .map(|w| {
            (
                w.night,
                format!(
                    "  {:<10} {:>5}–{:<7} {:>5}–{:<7}  {:>6.3} → {:<6.3} {:>6.3}",
                    w.night.to_string(),
                    super::local_hm(Some(w.start), site),
                    super::local_hm(Some(w.end), site),
                    super::utc_hm(Some(w.start)),
                    super::utc_hm(Some(w.end)),
                    w.phase_start,
                    w.phase_end,
                    w.span_cycles
                ),
            )
        })
        .collect();
    for d in &r.dark_nights {
        rows.push((*d, format!("  {:<10} not observable", d.to_string())));
    }
    rows.sort_by_key(|x| x.0);
    for (_, l) in rows {
        super::outln!("{l}");
    }
    super::outln!(
        "Visit plan: {} of {} phase bins on {} night(s)",
        r.plan.bins_covered,
        r.plan.bins,
        r.plan.nights_needed()
    );
    super::outln!(
        "  {:<20} {:>6} {:>4} {:>9} {:>5} {:>7}",
        "UTC",
        "phase",
        "bin",
        "exptime_s",
        "snr",
        "airmass"
    );
    for (i, v) in r.plan.visits.iter().enumerate() {
        let ep = r.epochs.get(i);
        super::outln!(
            "  {:<20} {:>6.3} {:>4} {:>9} {:>5} {:>7}",
            v.time.iso(),
            v.phase,
            v.bin,
            super::opt(ep.map(|x| x.exptime_s), 1),
            super::opt(ep.map(|x| x.snr), 0),
            super::opt(ep.map(|x| x.airmass).filter(|x| x.is_finite()), 2)
        );
    }
    match r.alias.beat_period_d {
        Some(b) => super::outln!(
            "Beat period (day alias {}/{}): {:.2} d",
            r.alias.m,
            r.alias.k,
            b
        ),
        None => super::outln!(
            "Beat period: none, 1/P = {}/{} per day exactly",
            r.alias.m,
            r.alias.k
        ),
    }
    super::outln!(
        "Phase uncertainty: {:.4} at the start, {:.4} at the end of the range{}",
        r.phase_sigma_start,
        r.phase_sigma,
        if r.stale { " (STALE)" } else { "" }
    );
    if let Some(u) = &r.star.ephemeris_update {
        print_update(u);
    }
    if let Some(d) = &r.discovery {
        print_discovery(d);
    }
    if let Some(rel) = &r.relation {
        let x = &rel.relation;
        super::outln!(
            "Relation: {} {} ({}{}), {}, valid {}–{} d, scatter {} mag; [Fe/H] {:+.2} ± {:.2} dex{}",
            x.class.words(),
            x.band,
            x.class.as_str(),
            if rel.class_from == rung::ladder::pulsator::ClassFrom::Inferred {
                ", inferred from the period"
            } else {
                ""
            },
            x.equation(),
            x.period_min_d,
            x.period_max_d,
            x.scatter_mag,
            rel.feh_dex,
            rel.feh_err_dex,
            if rel.feh_assumed { " (assumed)" } else { "" }
        );
        super::outln!("  source: {}", x.source);
    }
    if let (Some(p), Some(b)) = (&r.prediction, &r.budget) {
        super::outln!(
            "Distance: μ = {:.3} mag ({:.0} pc); σ_μ = {:.3} mag (scatter {:.3}, zero point {:.3}, metallicity {:.3}, mean mag {:.4}, extinction {:.3}, calibration {:.3}, K = {}) → σ_d/d = {:.2} % in {:.2} h{}",
            b.distance_modulus_mag,
            b.distance_pc,
            b.sigma_mu_mag,
            b.sigma_scatter_mag,
            b.sigma_zero_point_mag,
            b.sigma_feh_mag,
            b.sigma_mean_mag,
            b.sigma_ext_mag,
            b.sigma_cal_mag,
            m.harmonics,
            p.distance_precision_pct,
            p.hours_needed,
            goal.map(|g| format!(" (goal {g} %)")).unwrap_or_default()
        );
        if let Some(me) = &r.mean {
            super::outln!(
                "  mean magnitude: intensity mean {} (σ {:.4} mag{}{}); a magnitude mean of this light curve lies {:+.3} mag from it",
                if me.from == "template" {
                    "through the template"
                } else {
                    "of the Fourier fit"
                },
                me.sigma_mag,
                me.fourier_sigma_mag
                    .map(|f| format!("; Fourier fit {f:.4}"))
                    .unwrap_or_default(),
                me.template_sigma_mag
                    .map(|t| format!("; template {t:.4}"))
                    .unwrap_or_default(),
                -me.intensity_minus_magnitude_mag
            );
            if let Some(src) = &me.template_source {
                super::outln!("  template: {src}");
            }
        }
        if goal.is_some() {
            super::outln!("  verdict: {}", p.verdict.text());
        }
    }
    for c in &r.cautions {
        super::outln!("CAUTION: {c}");
    }
    for n in &r.notes {
        super::outln!("note: {n}");
    }
}

/// `rung phase --field NAME`: the field's plan (`Settings::field_report`):
/// its pointings, the visits that serve every star of each, each star's
/// phase points and distance, the field's distance with its terms.
fn run_field(
    st: &rung::programme::Settings,
    programme: &std::path::Path,
    name: &str,
    goal_pct: Option<f64>,
    json: bool,
) -> Result<()> {
    let mut targets = super::load_targets(programme)?;
    let links = rung::ladder::field::link(&targets);
    let Some(g) = links.by_name(&targets, name).cloned() else {
        let fields: Vec<&str> = links
            .groups
            .iter()
            .map(|g| targets[g.field].name.as_str())
            .collect();
        let list = if fields.is_empty() {
            "it has no field (a target of kind field)".to_string()
        } else {
            format!("its fields are {}", fields.join(", "))
        };
        match targets.iter().find(|t| t.name == name) {
            Some(t) => bail!(
                "'{}' in {} is a {} target, not a field; {list}",
                t.name,
                programme.display(),
                t.kind.as_str()
            ),
            None => bail!("{}: no field named '{name}'; {list}", programme.display()),
        }
    };
    if goal_pct.is_some() {
        targets[g.field].goal_pct = goal_pct;
    }
    for (i, why) in &links.refused {
        if targets[*i].field.trim() == name {
            eprintln!("rung: warning: {}", rung::output::one_line(why));
        }
    }
    let mut r = st.field_report(&targets, &g)?;
    rung::ladder::chain::anchor_field(st, &mut r, &targets, Some(programme));
    if json {
        let mut v = serde_json::to_value(&r)?;
        if let Some(o) = v.as_object_mut() {
            o.insert("site".into(), json!(st.site.name));
            o.insert("instrument".into(), json!(st.instrument().name));
            o.insert("from".into(), json!(st.from.to_string()));
            o.insert("to".into(), json!(st.to.to_string()));
            o.insert("settings".into(), st.to_json());
        }
        super::print_json(&v)?;
    } else {
        print_field_text(st, &r);
    }
    Ok(())
}

fn print_field_text(st: &rung::programme::Settings, r: &rung::ladder::field::FieldReport) {
    use rung::output::num;
    let site = &st.site;
    super::outln!(
        "Field {} ({} stars) from {} to {} at {} with {} (field of view {}′ × {}′, stars {}″ inside its edges); times local {} / UTC",
        r.field,
        r.stars.len(),
        st.from,
        st.to,
        site.name,
        st.instrument().name,
        num(r.fov_arcmin[0], 2),
        num(r.fov_arcmin[1], 2),
        num(r.margin_arcsec, 1),
        site.timezone.name()
    );
    for (i, p) in r.pointings.iter().enumerate() {
        super::outln!(
            "  pointing {} on {} ({}, {}): {} star(s); exposures for {} ({} at its faint phase, SNR {} per point), split for {} ({} at its bright phase); {} visit(s), {} h",
            i + 1,
            p.target,
            num(p.ra_deg, 4),
            num(p.dec_deg, 4),
            p.stars.len(),
            p.faintest.as_deref().unwrap_or("-"),
            num(p.faintest_mag, 2),
            num(r.snr_faintest, 0),
            p.brightest.as_deref().unwrap_or("-"),
            num(p.brightest_mag, 2),
            p.epochs.len(),
            num(p.hours, 2)
        );
        if !p.epochs.is_empty() {
            super::outln!(
                "    night        local  UTC    airm  bands        exp_s  frames  visit_s"
            );
        }
        for e in &p.epochs {
            let local = e.time.local(&site.timezone);
            let night = (local - chrono::Duration::hours(12)).date_naive();
            let bands: Vec<&str> = e.exposures.iter().map(|b| b.band.as_str()).collect();
            super::outln!(
                "    {}  {}  {}  {:>4}  {:<11} {:>6}  {:>6}  {:>7}",
                night,
                local.format("%H:%M"),
                super::utc_hm(Some(e.time)),
                num(e.airmass, 2),
                bands.join(" "),
                num(e.exptime_s, 0),
                e.n_exposures,
                num(e.visit_s, 0)
            );
        }
    }
    super::outln!(
        "  {:<14} {:>7} {:>4} {:>6} {:>5} {:>4} {:>4} {:>6} {:>7} {:>7} {:>6}",
        "star",
        "P_d",
        "band",
        "mean",
        "amp",
        "pts",
        "bins",
        "snr_lo",
        "σm̄",
        "μ",
        "weight"
    );
    for s in &r.stars {
        super::outln!(
            "  {:<14} {:>7} {:>4} {:>6} {:>5} {:>4} {:>4} {:>6} {:>7} {:>7} {:>6}{}",
            s.name,
            num(s.period_d, 3),
            s.band,
            num(s.mean_mag, 2),
            num(s.amplitude_mag, 2),
            s.points,
            s.bins_covered,
            num(s.snr_lowest, 0),
            num(s.sigma_mean_mag, 4),
            num(s.distance_modulus_mag, 3),
            num(s.weight, 3),
            s.excluded
                .as_ref()
                .map(|w| format!("  left out: {w}"))
                .unwrap_or_default()
        );
    }
    match &r.distance {
        Some(d) => {
            let terms: Vec<String> = d
                .error_terms
                .iter()
                .map(|t| {
                    format!(
                        "{} {}{}",
                        t.name,
                        num(t.sigma_mag, 3),
                        if t.shared { " (shared)" } else { "" }
                    )
                })
                .collect();
            super::outln!(
                "  field distance modulus {} ± {} mag ({} kpc) on {} from {} star(s): {}",
                num(d.distance_modulus_mag, 3),
                num(d.sigma_mu_mag, 3),
                num(d.distance_pc / 1000.0, 1),
                d.zero_point,
                d.n_stars,
                terms.join(", ")
            );
            super::outln!(
                "  σ_d/d {} % (floor {} %{})",
                num(d.distance_precision_pct, 2),
                num(d.floor_pct, 2),
                r.goal_pct
                    .map(|g| format!(", goal {} %", num(g, 1)))
                    .unwrap_or_default()
            );
        }
        None => {
            super::outln!("  no field distance: no star has a mean magnitude from these visits")
        }
    }
    match (&r.anchored, &r.anchored_why) {
        (Some(a), _) => super::outln!(
            "  on {}: μ {} ± {} mag ({} kpc), σ_d/d {} % (the anchors' parallaxes in place of the published zero point's error)",
            a.zero_point,
            num(a.distance_modulus_mag, 3),
            num(a.sigma_mu_mag, 3),
            num(a.distance_pc / 1000.0, 1),
            num(a.distance_precision_pct, 2)
        ),
        (None, Some(why)) => super::outln!("  on the programme's anchors: none ({why})"),
        (None, None) => {}
    }
    super::outln!(
        "  {} visit(s), {} h with overheads; verdict: {}",
        r.prediction.epochs.len(),
        num(r.prediction.hours_needed, 2),
        r.prediction.verdict.text()
    );
    for c in &r.cautions {
        super::outln!("  SUN CAUTION: {c}");
    }
    for n in &r.notes {
        super::outln!("  note: {n}");
    }
}
