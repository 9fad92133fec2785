//! `rung night`: the night of a date at a site.

use anyhow::{Context as _, Result};
use rung::astro::night::{Event, Night};
use rung::astro::time::parse_date;
use serde_json::{Map, Value, json};
use std::path::PathBuf;

/// Arguments of `rung night`.
#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    pub site: super::args::SiteArg,
    /// The local date whose evening starts the night, YYYY-MM-DD (default: the coming night at the site)
    #[arg(long)]
    pub date: Option<String>,
    /// Targets file (CSV or TOML): adds each target's rise, transit, set and window.
    #[arg(long)]
    pub targets: Option<PathBuf>,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

fn ev(o: &mut Map<String, Value>, reasons: &mut Map<String, Value>, key: &str, e: &Event) {
    o.insert(key.into(), json!(e.iso()));
    if let Some(r) = &e.reason {
        reasons.insert(key.into(), json!(r));
    }
}

/// Run `rung night`.
pub fn run(a: Args) -> Result<()> {
    let st = super::settings(
        super::args::choices(Some(&a.site), None, Some(&a.limits), None, None),
        a.targets.as_deref(),
        &[],
    )?;
    let site = st.site.clone();
    let limits = st.limits;
    let date = match &a.date {
        Some(d) => parse_date(d).context("--date")?,
        None => rung::programme::tonight(&site, super::now()?)?,
    };
    let targets = match &a.targets {
        Some(p) => super::load_targets(p)?,
        None => Vec::new(),
    };
    let night = Night::new(&site, date)?;
    let e = night.events();
    // One row per target from the night's table (the same rows the UI shows).
    let places: Vec<_> = targets.iter().map(|t| t.place()).collect();
    let table = rung::plan::night_table::rows(&night, &places, &limits);
    let rows: Vec<_> = targets.iter().zip(&table).collect();
    // The programme's bands (built-in merged with the user's), as the photometry uses.
    let bands = &st.photometer.bands;
    if a.json {
        let mut o = Map::new();
        let mut reasons = Map::new();
        o.insert("site".into(), json!(site.name));
        o.insert("date".into(), json!(date.to_string()));
        o.insert("timezone".into(), json!(site.timezone.name()));
        ev(&mut o, &mut reasons, "sunset", &e.sunset);
        ev(&mut o, &mut reasons, "sunrise", &e.sunrise);
        ev(&mut o, &mut reasons, "civil_dusk", &e.civil_dusk);
        ev(&mut o, &mut reasons, "civil_dawn", &e.civil_dawn);
        ev(&mut o, &mut reasons, "nautical_dusk", &e.nautical_dusk);
        ev(&mut o, &mut reasons, "nautical_dawn", &e.nautical_dawn);
        ev(
            &mut o,
            &mut reasons,
            "astronomical_dusk",
            &e.astronomical_dusk,
        );
        ev(
            &mut o,
            &mut reasons,
            "astronomical_dawn",
            &e.astronomical_dawn,
        );
        ev(&mut o, &mut reasons, "moonrise", &e.moonrise);
        ev(&mut o, &mut reasons, "moonset", &e.moonset);
        o.insert("moon_illumination".into(), json!(e.moon_illumination));
        o.insert("moon_waxing".into(), json!(e.moon_waxing));
        o.insert("min_alt_deg".into(), json!(limits.min_alt_deg));
        o.insert("sun_alt_deg".into(), json!(limits.sun_alt_deg));
        o.insert("reasons".into(), Value::Object(reasons));
        if a.targets.is_some() {
            let list: Vec<Value> = rows
                .iter()
                .map(|(t, row)| {
                    let tn = &row.night;
                    let mut r = Map::new();
                    let mut why = Map::new();
                    r.insert("name".into(), json!(t.name));
                    r.insert("kind".into(), json!(t.kind.as_str()));
                    ev(&mut r, &mut why, "rise", &tn.rise);
                    ev(&mut r, &mut why, "transit", &tn.transit);
                    ev(&mut r, &mut why, "set", &tn.set);
                    let w = tn.main_window();
                    r.insert("window_start".into(), json!(w.map(|w| w.0.iso())));
                    r.insert("window_end".into(), json!(w.map(|w| w.1.iso())));
                    r.insert(
                        "windows".into(),
                        json!(
                            tn.windows
                                .iter()
                                .map(|w| json!({"start": w.0.iso(), "end": w.1.iso()}))
                                .collect::<Vec<_>>()
                        ),
                    );
                    if w.is_none() {
                        why.insert(
                            "window_start".into(),
                            json!("not above the altitude limit while the Sun is below its limit"),
                        );
                    }
                    r.insert("observable_hours".into(), json!(tn.observable_hours));
                    r.insert("max_altitude_deg".into(), json!(tn.max_altitude_deg));
                    r.insert("min_airmass".into(), json!(tn.min_airmass));
                    r.insert(
                        "max_altitude_time".into(),
                        json!(tn.max_altitude_time.map(|t| t.iso())),
                    );
                    r.insert("moon_separation_deg".into(), json!(row.moon_separation_deg));
                    let sky = row.sky_brightness(bands, &t.band).and_then(|x| x.ok());
                    r.insert(
                        "sky_mag_arcsec2".into(),
                        json!(sky.as_ref().map(|x| x.sky_mag_arcsec2)),
                    );
                    r.insert(
                        "sun_caution".into(),
                        json!(
                            row.sun_caution
                                .as_ref()
                                .map(|(t, m)| json!({"first": t.iso(), "text": m}))
                        ),
                    );
                    r.insert("reasons".into(), Value::Object(why));
                    Value::Object(r)
                })
                .collect();
            o.insert("targets".into(), Value::Array(list));
        }
        super::print_json(&Value::Object(o))?;
        return Ok(());
    }
    let l = |e: &Event| super::local_hm(e.t, &site);
    let u = |e: &Event| super::utc_hm(e.t);
    super::outln!(
        "Night of {date} at {} ({:.4}°, {:.4}°, {:.0} m; times local {} / UTC)",
        site.name,
        site.lat_deg,
        site.lon_deg,
        site.elev_m,
        site.timezone.name()
    );
    super::outln!(
        "  {:<14} {:>7} {:>7}   {:<14} {:>7} {:>7}",
        "",
        "local",
        "UTC",
        "",
        "local",
        "UTC"
    );
    for (n1, e1, n2, e2) in [
        ("sunset", &e.sunset, "sunrise", &e.sunrise),
        ("civil dusk", &e.civil_dusk, "civil dawn", &e.civil_dawn),
        (
            "nautical dusk",
            &e.nautical_dusk,
            "nautical dawn",
            &e.nautical_dawn,
        ),
        (
            "astro dusk",
            &e.astronomical_dusk,
            "astro dawn",
            &e.astronomical_dawn,
        ),
        ("moonrise", &e.moonrise, "moonset", &e.moonset),
    ] {
        super::outln!(
            "  {:<14} {:>7} {:>7}   {:<14} {:>7} {:>7}",
            n1,
            l(e1),
            u(e1),
            n2,
            l(e2),
            u(e2)
        );
    }
    super::outln!(
        "  Moon {:.0}% lit, {}",
        100.0 * e.moon_illumination,
        if e.moon_waxing { "waxing" } else { "waning" }
    );
    for ev in [&e.astronomical_dusk, &e.sunset] {
        if let Some(r) = &ev.reason {
            super::outln!("  note: {r}");
        }
    }
    if !rows.is_empty() {
        super::outln!();
        super::outln!(
            "  Targets: window above {:.0}° with the Sun below {:.0}° (local times)",
            limits.min_alt_deg,
            limits.sun_alt_deg
        );
        super::outln!(
            "  {:<20} {:<9} {:>6} {:>6} {:>6} {:>13} {:>6} {:>7} {:>7} {:>5}",
            "name",
            "kind",
            "rise",
            "trans",
            "set",
            "window",
            "hours",
            "max alt",
            "airmass",
            "Moon"
        );
        for (t, row) in &rows {
            let tn = &row.night;
            let w = tn
                .main_window()
                .map(|w| {
                    format!(
                        "{}-{}",
                        super::local_hm(Some(w.0), &site),
                        super::local_hm(Some(w.1), &site)
                    )
                })
                .unwrap_or_else(|| "-".into());
            super::outln!(
                "  {:<20} {:<9} {:>6} {:>6} {:>6} {:>13} {:>6.2} {:>7} {:>7} {:>5}",
                t.name,
                t.kind.as_str(),
                l(&tn.rise),
                l(&tn.transit),
                l(&tn.set),
                w,
                tn.observable_hours,
                super::opt(tn.max_altitude_deg, 1),
                super::opt(tn.min_airmass, 2),
                row.moon_separation_deg
                    .map(|m| format!("{m:.0}°"))
                    .unwrap_or_else(|| "-".into()),
            );
        }
        for (t, row) in &rows {
            if let Some((at, m)) = &row.sun_caution {
                super::outln!(
                    "  {} from {}: {m}",
                    t.name,
                    super::local_hm(Some(*at), &site)
                );
            }
        }
    }
    Ok(())
}
