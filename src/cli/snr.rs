//! `rung snr` and `rung exptime`: signal-to-noise of an exposure, or the
//! exposure for a signal-to-noise, for one star at a site and instant.
//!
//! Without `--at`, the instant is the target's best time in a night: its
//! highest altitude while the Sun is below the programme's Sun limit (the
//! window's, −12° by default), in the night of `--date` or else the coming
//! night (`rung::programme::tonight`): "tonight's sky", not the daylit present.

use anyhow::{Context as _, Result, bail};
use chrono::NaiveDate;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::{Limits, Night};
use rung::astro::time::{Instant, parse_date, parse_instant};
use rung::astro::{pointing, sun_caution};

use rung::photometry::{Exposure, Photometer};
use serde_json::json;

/// Where, when and with what: the arguments both commands share.
#[derive(clap::Args)]
#[command(mut_arg("targets", |a| {
    a.help("Targets file (CSV or TOML) for --target (default: the demo programme)")
}))]
pub struct Common {
    /// Star magnitude above the atmosphere (default: the target's magnitude from --targets).
    #[arg(long, allow_hyphen_values = true)]
    pub mag: Option<f64>,
    /// Band (U, B, V, R, I, J, H, K or one from your bands.toml; default: the target's band, else V).
    #[arg(long)]
    pub band: Option<String>,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub aim: super::args::Pointing,
    /// Instant, ISO 8601 (a time without a zone is UTC), or 'now' (default: the best time of --date's night)
    #[arg(long, conflicts_with = "date")]
    pub at: Option<String>,
    /// A night, YYYY-MM-DD (local date of its evening): the target's highest altitude in it with the Sun below --sun-alt (default: the coming night)
    #[arg(long)]
    pub date: Option<String>,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Seeing FWHM, arcsec (default: the instrument's typical seeing).
    #[arg(long, allow_hyphen_values = true)]
    pub seeing: Option<f64>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `rung snr`.
#[derive(clap::Args)]
pub struct SnrArgs {
    /// Total exposure time, seconds.
    #[arg(long, allow_hyphen_values = true)]
    pub exptime: f64,
    /// Signal-to-noise at which to report the limiting magnitude.
    #[arg(long, default_value_t = 5.0, allow_hyphen_values = true)]
    pub limit_snr: f64,
    #[command(flatten)]
    pub common: Common,
}

/// Arguments of `rung exptime`.
#[derive(clap::Args)]
pub struct ExptimeArgs {
    /// Signal-to-noise to reach.
    #[arg(long, allow_hyphen_values = true)]
    pub snr: f64,
    #[command(flatten)]
    pub common: Common,
}

struct Setup {
    site: rung::astro::site::Site,
    name: String,
    place: CatalogPlace,
    mag: f64,
    band: String,
    t: Instant,
    time_rule: String,
    ph: Photometer,
}

/// The target's best time in the night of `date`: its highest altitude while
/// the Sun is below the limit (the same instant the Roster and `rung night`
/// measure the Moon distance at).
fn best_time(
    site: &rung::astro::site::Site,
    date: NaiveDate,
    place: &CatalogPlace,
    limits: &Limits,
) -> Result<Instant> {
    let night = Night::new(site, date)?;
    let tn = night.target(place, limits);
    match (tn.max_altitude_time, tn.max_altitude_deg) {
        (Some(t), Some(alt)) if alt > 0.0 => Ok(t),
        (Some(_), Some(alt)) => bail!(
            "the target stays below the horizon while the Sun is below {}° on the night of {date} (highest {alt:.1}°)",
            limits.sun_alt_deg
        ),
        _ => bail!(
            "the night of {date} has no time with the Sun below {}° at {}",
            limits.sun_alt_deg,
            site.name
        ),
    }
}

fn setup(c: &Common) -> Result<Setup> {
    let st = super::settings(
        super::args::choices(
            Some(&c.site),
            Some(&c.instrument),
            Some(&c.limits),
            None,
            None,
        ),
        c.aim.targets.as_deref(),
        &[],
    )?;
    let site = st.site.clone();
    let (name, place, tg) = c.aim.resolve()?;
    let mag = match (c.mag, &tg) {
        (Some(m), _) => rung::bounds::MAG.check_as("--mag", m)?,
        (None, Some(t)) => t
            .mag
            .or(t.mean_mag)
            .or(t.mag_now)
            .or(t.peak_mag)
            .with_context(|| format!("target '{}' has no magnitude; give --mag", t.name))?,
        (None, None) => bail!("give --mag (the star's magnitude above the atmosphere)"),
    };
    let band = c
        .band
        .clone()
        .or_else(|| {
            tg.as_ref()
                .map(|t| t.band.clone())
                .filter(|b| !b.is_empty())
        })
        .unwrap_or_else(|| "V".to_string());
    let (t, time_rule) = match (&c.at, &c.date) {
        (Some(a), None) if a.trim() == "now" => (super::now()?, "now".to_string()),
        (Some(a), None) => (parse_instant(a)?, "given instant".to_string()),
        (_, d) => {
            let date = match d {
                Some(d) => parse_date(d)?,
                None => rung::programme::tonight(&site, super::now()?)?,
            };
            (
                best_time(&site, date, &place, &st.limits)?,
                format!(
                    "highest altitude on the night of {date} with the Sun below {}°",
                    st.limits.sun_alt_deg
                ),
            )
        }
    };
    let mut ph = st.photometer.clone();
    if let Some(s) = c.seeing {
        ph = ph.with_seeing(rung::bounds::SEEING_ARCSEC.check_as("--seeing", s)?)?;
    }
    Ok(Setup {
        site,
        name,
        place,
        mag,
        band,
        t,
        time_rule,
        ph,
    })
}

fn emit(
    s: &Setup,
    ctx: &Context,
    e: &Exposure,
    extra: &[(&str, serde_json::Value)],
    json_out: bool,
    asked: &str,
) -> Result<()> {
    let p = pointing(&s.site, ctx, &s.place);
    let caution = sun_caution(&s.site, &p);
    let ins = &s.ph.instrument;
    let visit_s =
        e.budget.exptime_s + e.budget.n_exposures as f64 * ins.readout_s + ins.visit_overhead_s;
    if json_out {
        let mut v = serde_json::to_value(e)?;
        let o = v.as_object_mut().context("object")?;
        o.insert("time".into(), json!(s.t.iso()));
        o.insert("time_rule".into(), json!(s.time_rule));
        o.insert("site".into(), json!(s.site.name));
        o.insert("target".into(), json!(s.name));
        o.insert("readout_s".into(), json!(ins.readout_s));
        o.insert("visit_overhead_s".into(), json!(ins.visit_overhead_s));
        o.insert("visit_s".into(), json!(visit_s));
        for (k, val) in extra {
            o.insert((*k).into(), val.clone());
        }
        o.insert("cautions".into(), json!(caution.iter().collect::<Vec<_>>()));
        super::print_json(&v)?;
        return Ok(());
    }
    let b = &e.budget;
    super::outln!(
        "{} ({} = {:.2}) from {} with {} at {} ({})",
        s.name,
        e.band,
        e.mag,
        s.site.name,
        ins.name,
        s.t.iso(),
        s.time_rule
    );
    super::outln!("  {asked}");
    super::outln!(
        "  altitude {:.1}°, airmass {:.3}, extinction {:.3} mag; seeing {:.2}\"",
        e.altitude_deg,
        e.airmass,
        e.extinction_mag,
        e.seeing_fwhm_arcsec
    );
    let moon = match (e.sky.airglow_mag_arcsec2, e.sky.moon_mag_arcsec2) {
        // The near-infrared sky: airglow and heat, no Moon term.
        (Some(a), _) => format!(
            "airglow {a:.2}, thermal {}, no Moon term in the infrared",
            e.sky
                .thermal_mag_arcsec2
                .map_or("none".to_string(), |t| format!("{t:.2}"))
        ),
        (None, Some(m)) => format!("Moon term {m:.2}"),
        (None, None) => "Moon down".to_string(),
    };
    let tw = match e.sky.twilight_mag_arcsec2 {
        Some(m) => format!(", twilight term {m:.2}"),
        None => String::new(),
    };
    super::outln!(
        "  sky {:.2} mag/arcsec² in {} (dark {:.2}, {moon}{tw}); Moon {:.0}% lit, {:.1}° away, altitude {:.1}°",
        e.sky_mag_arcsec2,
        e.band,
        e.sky.dark_mag_arcsec2,
        100.0 * e.moon_illumination,
        e.moon_separation_deg,
        e.moon_altitude_deg
    );
    super::outln!(
        "  exposure {:.1} s in {} × {:.1} s; aperture radius {:.2}\" ({:.1} px, {:.0}% of the light), sky annulus {:.0} px",
        b.exptime_s,
        b.n_exposures,
        b.sub_exptime_s,
        e.aperture_radius_arcsec,
        b.aperture_pixels,
        100.0 * b.encircled_fraction,
        b.background_pixels
    );
    super::outln!(
        "  signal {:.0} e⁻; sky {:.1} e⁻/px, dark {:.2} e⁻/px",
        b.star_electrons,
        b.sky_electrons_per_pixel,
        b.dark_electrons_per_pixel
    );
    let var = b.noise_total_e.powi(2).max(f64::MIN_POSITIVE);
    super::outln!("  noise           e⁻     share of variance");
    for (label, n) in [
        ("star", b.noise_star_e),
        ("sky", b.noise_sky_e),
        ("dark", b.noise_dark_e),
        ("read", b.noise_read_e),
        ("scintillation", b.noise_scintillation_e),
    ] {
        super::outln!("    {label:<13} {n:9.1}   {:5.1}%", 100.0 * n * n / var);
    }
    super::outln!("    {:<13} {:9.1}", "total", b.noise_total_e);
    // The magnitude error 2.5/(ln 10 · SNR) is first order in 1/SNR: it
    // means something only for a detection.
    if b.snr >= 1.0 {
        super::outln!(
            "  SNR {:.1}  ({:.4} mag)",
            b.snr,
            2.5 / std::f64::consts::LN_10 / b.snr
        );
    } else {
        super::outln!(
            "  SNR {:.2}  (no detection: the noise exceeds the signal)",
            b.snr
        );
    }
    super::outln!(
        "  peak pixel {:.0} e⁻ of {:.0} e⁻ ({}); visit with overheads {:.0} s",
        b.peak_pixel_electrons,
        b.saturation_electrons,
        if b.saturated {
            "SATURATED"
        } else {
            "not saturated"
        },
        visit_s
    );
    if let (Some(lim), Some(snr)) = (
        extra
            .iter()
            .find(|(k, _)| *k == "limiting_mag")
            .and_then(|(_, v)| v.as_f64()),
        extra
            .iter()
            .find(|(k, _)| *k == "limiting_snr")
            .and_then(|(_, v)| v.as_f64()),
    ) {
        super::outln!("  limiting magnitude {lim:.2} at SNR {snr} in the same exposure");
    }
    for n in &e.notes {
        super::outln!("  note: {n}");
    }
    if let Some(c) = caution {
        super::outln!("  {c}");
    }
    Ok(())
}

/// Run `rung snr`.
pub fn run_snr(a: SnrArgs) -> Result<()> {
    rung::bounds::EXPTIME_S.check_as("--exptime", a.exptime)?;
    rung::bounds::SNR.check_as("--limit-snr", a.limit_snr)?;
    let s = setup(&a.common)?;
    let ctx = Context::exact(&s.site, s.t)?;
    let e = s.ph.snr_at(s.mag, &s.band, a.exptime, &ctx, &s.place)?;
    let lim =
        s.ph.limiting_mag_at(&s.band, a.exptime, a.limit_snr, &ctx, &s.place)?;
    let extra = [
        ("limiting_mag", json!(lim)),
        ("limiting_snr", json!(a.limit_snr)),
    ];
    let asked = format!("signal-to-noise of a {:.1} s exposure", a.exptime);
    emit(&s, &ctx, &e, &extra, a.common.json, &asked)
}

/// Run `rung exptime`.
pub fn run_exptime(a: ExptimeArgs) -> Result<()> {
    rung::bounds::SNR.check_as("--snr", a.snr)?;
    let s = setup(&a.common)?;
    let ctx = Context::exact(&s.site, s.t)?;
    let e = s.ph.exptime_at(s.mag, &s.band, a.snr, &ctx, &s.place)?;
    let asked = format!("exposure time for SNR {}", a.snr);
    emit(
        &s,
        &ctx,
        &e,
        &[("snr_goal", json!(a.snr))],
        a.common.json,
        &asked,
    )
}
