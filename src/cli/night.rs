//! `rung night`: the night of a date at a site.

use anyhow::{Context as _, Result};
use chrono::NaiveDate;
use rung::astro::frames::CatalogPlace;
use rung::astro::night::{Event, Night};
use rung::astro::night::{Limits, NightEvents};
use rung::astro::site::Site;
use rung::astro::time::Instant;
use rung::astro::time::parse_date;
use rung::io::targets::Target;
use rung::output::{JsonNest, push_json_instant, push_json_num, push_json_str};
use rung::plan::night_table::{NightRow, Rows};
use rung::sky::BandSet;
use std::io::Write;
use std::path::PathBuf;
use std::sync::OnceLock;

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

/// The night's JSON document, the bytes `output::json` writes for it (keys
/// in sorted order, numbers through serde_json, no negative zero, non-finite
/// as `null`), written straight to `so`: the targets' objects are made on
/// all cores, in chunks, each chunk written as it stands, in order. `seeds`
/// are instants many targets share (the dark intervals' ends), written as
/// text once.
#[allow(clippy::too_many_arguments)]
fn write_json(
    so: &mut dyn Write,
    site: &Site,
    date: NaiveDate,
    e: &NightEvents,
    limits: &Limits,
    rows: Option<&[(&Target, &NightRow)]>,
    bands: &BandSet,
    seeds: &[Instant],
) -> std::io::Result<()> {
    let out = &mut Vec::with_capacity(4096);
    let events = [
        ("astronomical_dawn", &e.astronomical_dawn),
        ("astronomical_dusk", &e.astronomical_dusk),
        ("civil_dawn", &e.civil_dawn),
        ("civil_dusk", &e.civil_dusk),
    ];
    let more = [
        ("moonrise", &e.moonrise),
        ("moonset", &e.moonset),
        ("nautical_dawn", &e.nautical_dawn),
        ("nautical_dusk", &e.nautical_dusk),
    ];
    let last = [("sunrise", &e.sunrise), ("sunset", &e.sunset)];
    let mut o = JsonNest::object(out, 0);
    let event = |o: &mut JsonNest, out: &mut Vec<u8>, (k, ev): (&str, &Event)| {
        o.key(out, k);
        push_json_instant(out, ev.t);
    };
    for x in events {
        event(&mut o, out, x);
    }
    o.key(out, "date");
    push_json_str(out, &date.to_string());
    o.key(out, "min_alt_deg");
    push_json_num(out, Some(limits.min_alt_deg));
    o.key(out, "moon_illumination");
    push_json_num(out, Some(e.moon_illumination));
    o.key(out, "moon_waxing");
    out.extend_from_slice(if e.moon_waxing { b"true" } else { b"false" });
    for x in more {
        event(&mut o, out, x);
    }
    o.key(out, "reasons");
    let mut r = JsonNest::object(out, o.inner());
    for (k, ev) in events.iter().chain(&more).chain(&last) {
        if let Some(why) = &ev.reason {
            r.key(out, k);
            push_json_str(out, why);
        }
    }
    r.close(out);
    o.key(out, "site");
    push_json_str(out, &site.name);
    o.key(out, "sun_alt_deg");
    push_json_num(out, Some(limits.sun_alt_deg));
    for x in last {
        event(&mut o, out, x);
    }
    if let Some(rows) = rows {
        o.key(out, "targets");
        let list_level = o.inner();
        let mut list = JsonNest::array(out, list_level);
        let level = list.inner();
        so.write_all(out)?;
        out.clear();
        // Each chunk's elements, separators included, in order.
        const CHUNK: usize = 256;
        let mut seeded = Stamps::default();
        for t in seeds {
            seeded.push(out, Some(*t));
            seeded.keep_all(out);
        }
        out.clear();
        write_in_order(so, rows.len().div_ceil(CHUNK), &|c| {
            let chunk = &rows[c * CHUNK..rows.len().min((c + 1) * CHUNK)];
            let mut b = Vec::with_capacity(1200 * chunk.len());
            let mut stamps = seeded.clone();
            for (k, (t, row)) in chunk.iter().enumerate() {
                JsonNest::item_apart(&mut b, list_level, c * CHUNK + k);
                write_target(&mut b, level, t, row, bands, &mut stamps);
            }
            b
        })?;
        list.add_items(rows.len());
        list.close(out);
    }
    o.key(out, "timezone");
    push_json_str(out, site.timezone.name());
    o.close(out);
    out.push(b'\n');
    so.write_all(out)
}

/// The bytes `make(c)` of the chunks `c` in `0..n`, made on all cores and
/// written to `so` in order, each as soon as the ones before it are (the
/// writing overlaps the making, and a written chunk's memory is free again).
fn write_in_order(
    so: &mut dyn Write,
    n: usize,
    make: &(dyn Fn(usize) -> Vec<u8> + Sync),
) -> std::io::Result<()> {
    let (tx, rx) = std::sync::mpsc::channel::<(usize, Vec<u8>)>();
    rayon::in_place_scope(|s| {
        for c in 0..n {
            let tx = tx.clone();
            s.spawn(move |_| {
                let _ = tx.send((c, make(c)));
            });
        }
        drop(tx);
        let mut early = std::collections::BTreeMap::new();
        let mut next = 0;
        let mut res = Ok(());
        for (c, b) in rx {
            early.insert(c, b);
            while let Some(b) = early.remove(&next) {
                if res.is_ok() {
                    res = so.write_all(&b);
                }
                next += 1;
            }
        }
        res
    })
}

/// Instants already written as JSON text, copied instead of converted again:
/// the night's own (kept for every target) and those of the target being
/// written (its main window is in its list of windows too).
#[derive(Clone, Default)]
struct Stamps {
    /// The night's: instant (bits) and text.
    night: Vec<((u64, u64), Vec<u8>)>,
    /// The target's: instant (bits) and where its text is in the buffer.
    target: Vec<((u64, u64), std::ops::Range<usize>)>,
}

impl Stamps {
    /// `t` as [`push_json_instant`] writes it.
    fn push(&mut self, b: &mut Vec<u8>, t: Option<Instant>) {
        let Some(t) = t else {
            b.extend_from_slice(b"null");
            return;
        };
        let key = (t.utc1.to_bits(), t.utc2.to_bits());
        if let Some((_, text)) = self.night.iter().find(|(k, _)| *k == key) {
            b.extend_from_slice(text);
            return;
        }
        if let Some((_, r)) = self.target.iter().find(|(k, _)| *k == key) {
            b.extend_from_within(r.clone());
            return;
        }
        let from = b.len();
        push_json_instant(b, Some(t));
        self.target.push((key, from..b.len()));
    }

    /// Keep the target's instants, written into `b`, for every target.
    fn keep_all(&mut self, b: &[u8]) {
        for (k, r) in self.target.drain(..) {
            self.night.push((k, b[r].to_vec()));
        }
    }
}

/// One target's object in the night's JSON, at `level`.
fn write_target(
    b: &mut Vec<u8>,
    level: usize,
    t: &Target,
    row: &NightRow,
    bands: &BandSet,
    stamps: &mut Stamps,
) {
    stamps.target.clear();
    let tn = &row.night;
    let w = tn.main_window();
    let mut o = JsonNest::object(b, level);
    o.key(b, "kind");
    push_json_str(b, t.kind.as_str());
    o.key(b, "max_altitude_deg");
    push_json_num(b, tn.max_altitude_deg);
    o.key(b, "max_altitude_time");
    stamps.push(b, tn.max_altitude_time);
    o.key(b, "min_airmass");
    push_json_num(b, tn.min_airmass);
    o.key(b, "moon_separation_deg");
    push_json_num(b, row.moon_separation_deg);
    o.key(b, "name");
    push_json_str(b, &t.name);
    o.key(b, "observable_hours");
    push_json_num(b, Some(tn.observable_hours));
    o.key(b, "reasons");
    let mut why = JsonNest::object(b, o.inner());
    for (k, ev) in [
        ("rise", &tn.rise),
        ("set", &tn.set),
        ("transit", &tn.transit),
    ] {
        if let Some(r) = &ev.reason {
            why.key(b, k);
            push_json_str(b, r);
        }
    }
    if w.is_none() {
        why.key(b, "window_start");
        push_json_str(
            b,
            "not above the altitude limit while the Sun is below its limit",
        );
    }
    why.close(b);
    o.key(b, "rise");
    stamps.push(b, tn.rise.t);
    o.key(b, "set");
    stamps.push(b, tn.set.t);
    o.key(b, "sky_mag_arcsec2");
    let sky = row.sky_brightness(bands, &t.band).and_then(|x| x.ok());
    push_json_num(b, sky.as_ref().map(|x| x.sky_mag_arcsec2));
    o.key(b, "sun_caution");
    match &row.sun_caution {
        Some((at, m)) => {
            let mut c = JsonNest::object(b, o.inner());
            c.key(b, "first");
            stamps.push(b, Some(*at));
            c.key(b, "text");
            push_json_str(b, m);
            c.close(b);
        }
        None => b.extend_from_slice(b"null"),
    }
    o.key(b, "transit");
    stamps.push(b, tn.transit.t);
    o.key(b, "window_end");
    stamps.push(b, w.map(|w| w.1));
    o.key(b, "window_start");
    stamps.push(b, w.map(|w| w.0));
    o.key(b, "windows");
    let mut list = JsonNest::array(b, o.inner());
    for (start, end) in &tn.windows {
        list.item(b);
        let mut x = JsonNest::object(b, list.inner());
        x.key(b, "end");
        stamps.push(b, Some(*end));
        x.key(b, "start");
        stamps.push(b, Some(*start));
        x.close(b);
    }
    list.close(b);
    o.close(b);
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
    // The night is built on a thread of its own while the targets are read
    // (errors reported in the same order as one after the other). Once it
    // stands, the rows of the targets read so far are made on the pool in
    // chunks while the rest of the file is read.
    const ROWS_CHUNK: usize = 64;
    let night_cell: OnceLock<Night> = OnceLock::new();
    let shared: OnceLock<Rows> = OnceLock::new();
    let (tx, rx) = std::sync::mpsc::channel::<(usize, Vec<NightRow>)>();
    let (targets, night) = std::thread::scope(|s| {
        let night = s.spawn(|| {
            let n = Night::new(&site, date)?;
            let n = night_cell.get_or_init(|| n);
            let _ = shared.set(Rows::new(n, &limits));
            rung::error::Result::Ok(())
        });
        rayon::in_place_scope(|rs| {
            let mut chunks = 0usize;
            let mut spawn = |places: Vec<CatalogPlace>| {
                let (tx, k, shared) = (tx.clone(), chunks, &shared);
                chunks += 1;
                rs.spawn(move |_| {
                    if let Some(sh) = shared.get() {
                        let _ = tx.send((k, places.iter().map(|p| sh.row(p)).collect()));
                    }
                });
            };
            let mut waiting: Vec<Vec<CatalogPlace>> = Vec::new();
            let mut filling: Vec<CatalogPlace> = Vec::with_capacity(ROWS_CHUNK);
            let targets = match &a.targets {
                Some(p) => super::load_targets_then(p, &mut |t| {
                    filling.push(t.place());
                    if filling.len() == ROWS_CHUNK {
                        waiting.push(std::mem::replace(
                            &mut filling,
                            Vec::with_capacity(ROWS_CHUNK),
                        ));
                    }
                    if shared.get().is_some() {
                        for w in waiting.drain(..) {
                            spawn(w);
                        }
                    }
                }),
                None => Ok(Vec::new()),
            };
            let night = night
                .join()
                .unwrap_or_else(|p| std::panic::resume_unwind(p));
            if targets.is_ok() && shared.get().is_some() {
                waiting.push(filling);
                for w in waiting {
                    spawn(w);
                }
            }
            (targets, night)
        })
    });
    drop(tx);
    let targets = targets?;
    night?;
    let night = night_cell.get().context("the night was not built")?;
    let e = night.events();
    // One row per target, in file order (the same rows the UI shows).
    let mut parts: Vec<(usize, Vec<NightRow>)> = rx.into_iter().collect();
    parts.sort_unstable_by_key(|p| p.0);
    let table: Vec<&NightRow> = parts.iter().flat_map(|p| &p.1).collect();
    anyhow::ensure!(
        table.len() == targets.len(),
        "{} rows for {} targets",
        table.len(),
        targets.len()
    );
    let rows: Vec<_> = targets.iter().zip(table.iter().copied()).collect();
    // The programme's bands (built-in merged with the user's), as the photometry uses.
    let bands = &st.photometer.bands;
    if a.json {
        let seeds: Vec<_> = night
            .dark_intervals(limits.sun_alt_deg)
            .iter()
            .flat_map(|d| [d.0, d.1])
            .collect();
        let mut so = std::io::stdout().lock();
        write_json(
            &mut so,
            &site,
            date,
            &e,
            &limits,
            a.targets.is_some().then_some(&rows[..]),
            bands,
            &seeds,
        )?;
        so.flush()?;
        drop(rows);
        drop(table);
        // The process ends here: its memory goes back whole, not target by target.
        std::mem::forget((parts, targets));
        return Ok(());
    }
    // One buffered writer for the whole table (not a write per line).
    let mut w = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
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
        w,
        "  {:<14} {:>7} {:>7}   {:<14} {:>7} {:>7}",
        "",
        "local",
        "UTC",
        "",
        "local",
        "UTC"
    )?;
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
            w,
            "  {:<14} {:>7} {:>7}   {:<14} {:>7} {:>7}",
            n1,
            l(e1),
            u(e1),
            n2,
            l(e2),
            u(e2)
        )?;
    }
    super::outln!(
        w,
        "  Moon {:.0}% lit, {}",
        100.0 * e.moon_illumination,
        if e.moon_waxing { "waxing" } else { "waning" }
    )?;
    for ev in [&e.astronomical_dusk, &e.sunset] {
        if let Some(r) = &ev.reason {
            super::outln!(w, "  note: {r}")?;
        }
    }
    if !rows.is_empty() {
        writeln!(w)?;
        super::outln!(
            w,
            "  Targets: window above {:.0}° with the Sun below {:.0}° (local times)",
            limits.min_alt_deg,
            limits.sun_alt_deg
        )?;
        super::outln!(
            w,
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
        )?;
        // The rows' lines (and then the Sun cautions') made on all cores in
        // chunks, written in order.
        const CHUNK: usize = 256;
        let chunks = |w: &mut dyn Write,
                      f: &(dyn Fn(&mut Vec<u8>, &Target, &NightRow) + Sync)|
         -> std::io::Result<()> {
            write_in_order(w, rows.len().div_ceil(CHUNK), &|c| {
                let chunk = &rows[c * CHUNK..rows.len().min((c + 1) * CHUNK)];
                let mut b = Vec::with_capacity(128 * chunk.len());
                for (t, row) in chunk {
                    f(&mut b, t, row);
                }
                b
            })
        };
        chunks(&mut w, &|b, t, row| {
            let tn = &row.night;
            let win = tn
                .main_window()
                .map(|w| {
                    format!(
                        "{}-{}",
                        super::local_hm(Some(w.0), &site),
                        super::local_hm(Some(w.1), &site)
                    )
                })
                .unwrap_or_else(|| "-".into());
            // Writing into memory cannot fail.
            let _ = super::outln!(
                b,
                "  {:<20} {:<9} {:>6} {:>6} {:>6} {:>13} {:>6.2} {:>7} {:>7} {:>5}",
                t.name,
                t.kind.as_str(),
                l(&tn.rise),
                l(&tn.transit),
                l(&tn.set),
                win,
                tn.observable_hours,
                super::opt(tn.max_altitude_deg, 1),
                super::opt(tn.min_airmass, 2),
                row.moon_separation_deg
                    .map(|m| format!("{m:.0}°"))
                    .unwrap_or_else(|| "-".into()),
            );
        })?;
        chunks(&mut w, &|b, t, row| {
            if let Some((at, m)) = &row.sun_caution {
                let _ = super::outln!(
                    b,
                    "  {} from {}: {m}",
                    t.name,
                    super::local_hm(Some(*at), &site)
                );
            }
        })?;
    }
    w.flush()?;
    drop(w);
    drop(rows);
    drop(table);
    // The process ends here: its memory goes back whole, not target by target.
    std::mem::forget((parts, targets));
    Ok(())
}
