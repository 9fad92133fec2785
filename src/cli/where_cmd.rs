//! `rung where`: one target, one instant.

use anyhow::{Context as _, Result};
use rung::astro::frames::Context;
use rung::astro::time::parse_instant;
use rung::astro::{pointing, sun_caution};

use serde_json::json;

/// Arguments of `rung where`.
#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub aim: super::args::Pointing,
    /// Instant, ISO 8601 (a time without a zone is UTC), or 'now'.
    #[arg(long, default_value = "now")]
    pub at: String,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

/// Run `rung where`.
pub fn run(a: Args) -> Result<()> {
    let st = super::settings(
        super::args::choices(Some(&a.site), None, None, None, None),
        a.aim.targets.as_deref(),
        &[],
    )?;
    let site = st.site.clone();
    let t = match a.at.as_str() {
        "now" => super::now()?,
        at => parse_instant(at).context("--at")?,
    };
    let (name, place, _) = a.aim.resolve()?;
    let ctx = Context::exact(&site, t)?;
    let p = pointing(&site, &ctx, &place);
    let caution = sun_caution(&site, &p);
    // Sky model (src/sky): V sky at the target, null below the horizon. A broken
    // user bands.toml is reported and leaves the key null; the rest still prints.
    let sky_v = st
        .photometer
        .bands
        .sky_at("V", &ctx, &place)
        .ok()
        .map(|s| s.sky_mag_arcsec2);
    if a.json {
        let mut v = serde_json::to_value(&p)?;
        let o = v.as_object_mut().context("object")?;
        o.insert("time".into(), json!(t.iso()));
        o.insert("site".into(), json!(site.name));
        o.insert("target".into(), json!(name));
        o.insert("sky_v_mag_arcsec2".into(), json!(sky_v));
        o.insert("humidity".into(), json!(site.humidity));
        o.insert("cautions".into(), json!(caution.iter().collect::<Vec<_>>()));
        super::print_json(&v)?;
        return Ok(());
    }
    let local = t.local(&site.timezone);
    super::outln!(
        "{name} from {} at {} ({} local)",
        site.name,
        t.iso(),
        local.format("%Y-%m-%d %H:%M:%S %Z")
    );
    super::outln!(
        "  altitude      {:8.3}°  (geometric {:.3}°)",
        p.altitude_deg,
        p.altitude_geometric_deg
    );
    super::outln!("  azimuth       {:8.3}°  (north 0, east 90)", p.azimuth_deg);
    super::outln!("  airmass       {:>8}", super::opt(p.airmass, 3));
    super::outln!("  hour angle    {:+8.3} h", p.hour_angle_h);
    super::outln!("  parallactic   {:+8.2}°", p.parallactic_angle_deg);
    super::outln!(
        "  Sun           {:+8.2}° altitude, {:.1}° away",
        p.sun_altitude_deg,
        p.sun_separation_deg
    );
    super::outln!(
        "  Moon          {:+8.2}° altitude, {:.1}° away, {:.0}% lit",
        p.moon_altitude_deg,
        p.moon_separation_deg,
        100.0 * p.moon_illumination
    );
    super::outln!(
        "  sky V         {:>8} mag/arcsec² at the target",
        super::opt(sky_v, 2)
    );
    super::outln!(
        "  refraction at {:.1} hPa, {:.1} °C, humidity {:.0} %",
        p.pressure_hpa,
        p.temperature_c,
        100.0 * site.humidity
    );
    if let Some(c) = caution {
        super::outln!("  {c}");
    }
    Ok(())
}
