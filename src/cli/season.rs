//! `rung season`: every target on every night of a date range.
//!
//! Rows stream out one night at a time (formatted on all cores), so a
//! 10 000-target, one-year run holds one night of rows in memory.

use anyhow::{Context as _, Result};
use rayon::prelude::*;
use rung::output::{csv_field, csv_num, csv_record, push_iso, push_num, push_uint, push2};
use rung::plan::season::{
    self, Constraints, NightRows, NightSky, SeasonSummary, TargetNightRow, TargetSummary,
};
use std::io::{IsTerminal, Write};
use std::ops::ControlFlow;
use std::path::PathBuf;

/// Arguments of `rung season`.
#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    pub site: super::args::SiteArg,
    /// Targets file (CSV or TOML).
    #[arg(long)]
    pub targets: PathBuf,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Minimum distance from the Moon's centre, degrees (default: no Moon limit).
    #[arg(long, allow_hyphen_values = true)]
    pub moon_sep: Option<f64>,
    /// One CSV row per target and night (or per target with --summary).
    #[arg(long, conflicts_with = "json")]
    pub csv: bool,
    /// JSON output (rows, or per-target totals with --summary).
    #[arg(long)]
    pub json: bool,
    /// Per-target totals instead of rows: total hours, best month, first and last night.
    #[arg(long)]
    pub summary: bool,
}

/// CSV header of the per-night rows (the first five columns are a contract).
pub const ROW_HEADER: &str = "target,night,observable_hours,best_airmass,moon_separation_min_deg,max_altitude_deg,transit,transit_altitude_deg,window_start,window_end,windows,dark_hours,moon_illumination,sun_caution";

/// CSV header of the per-target totals.
pub const SUMMARY_HEADER: &str = "target,total_hours,nights_observable,first_night,last_night,best_month,best_month_hours,best_airmass,best_airmass_night";

/// Rows formatted per parallel work item.
const ROWS_PER_CHUNK: usize = 512;

/// Run `rung season`.
pub fn run(a: Args) -> Result<()> {
    let st = super::settings(
        super::args::choices(Some(&a.site), None, Some(&a.limits), Some(&a.range), None),
        Some(&a.targets),
        &[],
    )?;
    let site = st.site.clone();
    let c = Constraints::new(st.limits.min_alt_deg, st.limits.sun_alt_deg, a.moon_sep)?;
    let (from, to) = (st.from, st.to);
    let nights = season::nights_in(from, to)?.len();
    let targets = super::load_targets(&a.targets)?;
    let places: Vec<_> = targets.iter().map(|t| t.place()).collect();
    let names: Vec<String> = targets.iter().map(|t| t.name.clone()).collect();

    let work = nights as u64 * places.len() as u64;
    let bar = if std::io::stderr().is_terminal() && work >= 100_000 {
        let b = indicatif::ProgressBar::with_draw_target(
            Some(nights as u64),
            indicatif::ProgressDrawTarget::stderr(),
        );
        if let Ok(st) = indicatif::ProgressStyle::with_template(
            "{prefix} [{bar:32}] {pos}/{len} nights, {eta} left",
        ) {
            b.set_style(st.progress_chars("=> "));
        }
        b.set_prefix("season");
        b
    } else {
        indicatif::ProgressBar::hidden()
    };

    // Night chunks (tens of kilobytes each) go straight to the file descriptor;
    // the small buffer only gathers headers and summaries.
    let mut out = std::io::BufWriter::with_capacity(1 << 15, raw_stdout());
    let mut io_err: Option<std::io::Error> = None;
    let mut summary = SeasonSummary::new(places.len());
    let want_rows = !a.summary && (a.csv || a.json);

    let csv_names: Vec<Vec<u8>> = names
        .iter()
        .map(|n| csv_field(n).into_owned().into_bytes())
        .collect();
    let json_names: Vec<Vec<u8>> = names
        .iter()
        .map(|n| {
            serde_json::to_string(n)
                .unwrap_or_else(|_| "\"?\"".into())
                .into_bytes()
        })
        .collect();

    if want_rows {
        let head = if a.csv {
            format!("{ROW_HEADER}\n")
        } else {
            format!(
                "{{\"site\":{},\"from\":\"{from}\",\"to\":\"{to}\",\"nights\":{nights},\"target_count\":{},\"min_alt_deg\":{},\"sun_alt_deg\":{},\"moon_sep_deg\":{},\"rows\":[",
                serde_json::to_string(&site.name)?,
                places.len(),
                c.min_alt_deg,
                c.sun_alt_deg,
                c.moon_sep_deg
            )
        };
        out.write_all(head.as_bytes())?;
    }
    let mut first_json = true;
    let mut pool: Vec<Vec<u8>> = Vec::new();
    let mut cautions = 0usize;
    season::scan(&site, &places, from, to, &c, |nr: &NightRows<'_>| {
        bar.inc(1);
        if !want_rows {
            summary.add(nr);
        }
        cautions += nr.rows.iter().filter(|r| r.sun_caution).count();
        if !want_rows {
            return ControlFlow::Continue(());
        }
        let fmt = NightFmt::new(nr.sky);
        // Format on all cores into buffers kept from night to night.
        let n_chunks = nr.rows.len().div_ceil(ROWS_PER_CHUNK);
        if pool.len() < n_chunks {
            pool.resize_with(n_chunks, Vec::new);
        }
        nr.rows
            .par_chunks(ROWS_PER_CHUNK)
            .zip(pool.par_iter_mut())
            .for_each(|(rows, buf)| {
                buf.clear();
                for r in rows {
                    if a.csv {
                        fmt.csv_row(buf, &csv_names[r.target], r);
                    } else {
                        fmt.json_row(buf, &json_names[r.target], r);
                    }
                }
            });
        for ch in &pool[..n_chunks] {
            let ch = if !a.csv && first_json && !ch.is_empty() {
                first_json = false;
                &ch[1..] // drop the leading comma of the very first row
            } else {
                &ch[..]
            };
            if let Err(e) = out.write_all(ch) {
                io_err = Some(e);
                return ControlFlow::Break(());
            }
        }
        ControlFlow::Continue(())
    })?;
    bar.finish_and_clear();
    if let Some(e) = io_err {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            return Ok(());
        }
        return Err(e).context("writing the season rows");
    }
    if cautions > 0 {
        eprintln!(
            "rung: SUN CAUTION: {cautions} target-nights have a window with the Sun up and the target within the site's Sun-avoidance angle ({:.0}°); see the sun_caution column; the observatory's own safety rules prevail",
            site.sun_avoid_deg
        );
    }
    let res = if want_rows {
        if a.json {
            out.write_all(b"]}\n")
        } else {
            Ok(())
        }
    } else {
        let totals = summary.finish();
        write_summary(&mut out, &a, &site, from, to, &c, &names, &totals)
    };
    match res.and_then(|_| out.flush()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        r => r.context("writing the season output"),
    }
}

/// Standard output without its line buffering (a duplicate of the descriptor on Unix).
fn raw_stdout() -> Box<dyn Write> {
    #[cfg(unix)]
    {
        use std::os::fd::AsFd;
        if let Ok(fd) = std::io::stdout().as_fd().try_clone_to_owned() {
            return Box::new(std::fs::File::from(fd));
        }
    }
    Box::new(std::io::stdout())
}

#[allow(clippy::too_many_arguments)]
fn write_summary(
    out: &mut impl Write,
    a: &Args,
    site: &rung::astro::site::Site,
    from: chrono::NaiveDate,
    to: chrono::NaiveDate,
    c: &Constraints,
    names: &[String],
    totals: &[TargetSummary],
) -> std::io::Result<()> {
    let d = |x: Option<chrono::NaiveDate>| x.map(|d| d.to_string());
    if a.csv {
        writeln!(out, "{SUMMARY_HEADER}")?;
        for t in totals {
            out.write_all(
                csv_record(&[
                    names[t.target].clone(),
                    csv_num(t.total_hours, 3),
                    t.nights_observable.to_string(),
                    d(t.first_night).unwrap_or_default(),
                    d(t.last_night).unwrap_or_default(),
                    t.best_month_text().unwrap_or_default(),
                    csv_num(t.best_month_hours, 3),
                    csv_num(t.best_airmass, 3),
                    d(t.best_airmass_night).unwrap_or_default(),
                ])
                .as_bytes(),
            )?;
        }
        return Ok(());
    }
    if a.json {
        let list: Vec<serde_json::Value> = totals
            .iter()
            .map(|t| {
                serde_json::json!({
                    "target": names[t.target],
                    "total_hours": t.total_hours,
                    "nights_observable": t.nights_observable,
                    "first_night": d(t.first_night),
                    "last_night": d(t.last_night),
                    "best_month": t.best_month_text(),
                    "best_month_hours": t.best_month_hours,
                    "best_airmass": t.best_airmass,
                    "best_airmass_night": d(t.best_airmass_night),
                })
            })
            .collect();
        let v = serde_json::json!({
            "site": site.name,
            "from": from.to_string(),
            "to": to.to_string(),
            "nights": (to - from).num_days() + 1,
            "min_alt_deg": c.min_alt_deg,
            "sun_alt_deg": c.sun_alt_deg,
            "moon_sep_deg": c.moon_sep_deg,
            "summary": list,
        });
        let text = rung::output::json(&v).map_err(std::io::Error::other)?;
        return writeln!(out, "{text}");
    }
    super::outln!(
        out,
        "Season {from} to {to} at {}: above {:.0}°, Sun below {:.0}°{}",
        site.name,
        c.min_alt_deg,
        c.sun_alt_deg,
        if c.moon_sep_deg > 0.0 {
            format!(", at least {:.0}° from the Moon", c.moon_sep_deg)
        } else {
            String::new()
        }
    )?;
    super::outln!(
        out,
        "  {:<20} {:>8} {:>6} {:>10} {:>10} {:>8} {:>7} {:>7}",
        "target",
        "hours",
        "nights",
        "first",
        "last",
        "best mo",
        "mo hrs",
        "airmass"
    )?;
    for t in totals {
        super::outln!(
            out,
            "  {:<20} {:>8.1} {:>6} {:>10} {:>10} {:>8} {:>7.1} {:>7}",
            names[t.target],
            t.total_hours,
            t.nights_observable,
            d(t.first_night).unwrap_or_else(|| "-".into()),
            d(t.last_night).unwrap_or_else(|| "-".into()),
            t.best_month_text().unwrap_or_else(|| "-".into()),
            t.best_month_hours,
            super::opt(t.best_airmass, 2),
        )?;
    }
    Ok(())
}

/// Per-night formatting state: the date text and the clock origin.
struct NightFmt {
    date: Vec<u8>,
    mid_unix_s: f64,
    /// Unix day number of the first of three cached date prefixes.
    day0: i64,
    /// `YYYY-MM-DDT` of day0, day0 + 1, day0 + 2.
    prefixes: [[u8; 11]; 3],
    /// `,dark_hours,moon_illumination,` for CSV.
    csv_tail: Vec<u8>,
    dark_hours: f64,
    moon_illumination: f64,
}

impl NightFmt {
    fn new(sky: &NightSky) -> Self {
        let mid_unix_s = sky.mid_unix_s();
        let day0 = (mid_unix_s / 86_400.0).floor() as i64 - 1;
        let mut prefixes = [[0u8; 11]; 3];
        for (i, p) in prefixes.iter_mut().enumerate() {
            let mut b = Vec::with_capacity(20);
            push_iso(&mut b, ((day0 + i as i64) * 86_400) as f64);
            p.copy_from_slice(&b[..11]);
        }
        let mut csv_tail = vec![b','];
        push_num(&mut csv_tail, Some(sky.dark_hours()), 3, false);
        csv_tail.push(b',');
        push_num(&mut csv_tail, Some(sky.moon_illumination), 3, false);
        csv_tail.push(b',');
        NightFmt {
            date: sky.date.to_string().into_bytes(),
            mid_unix_s,
            day0,
            prefixes,
            csv_tail,
            dark_hours: sky.dark_hours(),
            moon_illumination: sky.moon_illumination,
        }
    }

    /// ISO text of a Unix time inside the cached three days (else the full path).
    fn iso(&self, buf: &mut Vec<u8>, unix_s: f64) {
        let t = unix_s.round() as i64;
        let k = t.div_euclid(86_400) - self.day0;
        if !(0..3).contains(&k) {
            push_iso(buf, unix_s);
            return;
        }
        let sod = t.rem_euclid(86_400) as usize;
        buf.extend_from_slice(&self.prefixes[k as usize]);
        push2(buf, sod / 3600);
        buf.push(b':');
        push2(buf, sod / 60 % 60);
        buf.push(b':');
        push2(buf, sod % 60);
        buf.push(b'Z');
    }

    fn time(&self, buf: &mut Vec<u8>, off: Option<f64>, quote: bool) {
        match off {
            Some(s) => {
                if quote {
                    buf.push(b'"');
                }
                self.iso(buf, self.mid_unix_s + s);
                if quote {
                    buf.push(b'"');
                }
            }
            None if quote => buf.extend_from_slice(b"null"),
            None => {}
        }
    }

    fn csv_row(&self, buf: &mut Vec<u8>, name: &[u8], r: &TargetNightRow) {
        buf.extend_from_slice(name);
        buf.push(b',');
        buf.extend_from_slice(&self.date);
        buf.push(b',');
        push_num(buf, Some(r.observable_hours), 3, false);
        buf.push(b',');
        push_num(buf, r.best_airmass, 3, false);
        buf.push(b',');
        push_num(buf, r.moon_separation_min_deg, 2, false);
        buf.push(b',');
        push_num(buf, r.max_altitude_deg, 2, false);
        buf.push(b',');
        self.time(buf, r.transit_s, false);
        buf.push(b',');
        push_num(buf, Some(r.transit_altitude_deg), 2, false);
        buf.push(b',');
        self.time(buf, r.window_start_s, false);
        buf.push(b',');
        self.time(buf, r.window_end_s, false);
        buf.push(b',');
        push_uint(buf, r.windows as u64);
        buf.extend_from_slice(&self.csv_tail);
        buf.extend_from_slice(if r.sun_caution { b"true\n" } else { b"false\n" });
    }

    fn json_row(&self, buf: &mut Vec<u8>, name: &[u8], r: &TargetNightRow) {
        buf.extend_from_slice(b",\n{\"target\":");
        buf.extend_from_slice(name);
        buf.extend_from_slice(b",\"night\":\"");
        buf.extend_from_slice(&self.date);
        buf.extend_from_slice(b"\",\"observable_hours\":");
        push_num(buf, Some(r.observable_hours), 4, true);
        buf.extend_from_slice(b",\"best_airmass\":");
        push_num(buf, r.best_airmass, 4, true);
        buf.extend_from_slice(b",\"moon_separation_min_deg\":");
        push_num(buf, r.moon_separation_min_deg, 3, true);
        buf.extend_from_slice(b",\"max_altitude_deg\":");
        push_num(buf, r.max_altitude_deg, 3, true);
        buf.extend_from_slice(b",\"transit\":");
        self.time(buf, r.transit_s, true);
        buf.extend_from_slice(b",\"transit_altitude_deg\":");
        push_num(buf, Some(r.transit_altitude_deg), 3, true);
        buf.extend_from_slice(b",\"window_start\":");
        self.time(buf, r.window_start_s, true);
        buf.extend_from_slice(b",\"window_end\":");
        self.time(buf, r.window_end_s, true);
        buf.extend_from_slice(b",\"windows\":");
        push_uint(buf, r.windows as u64);
        buf.extend_from_slice(b",\"dark_hours\":");
        push_num(buf, Some(self.dark_hours), 4, true);
        buf.extend_from_slice(b",\"moon_illumination\":");
        push_num(buf, Some(self.moon_illumination), 4, true);
        buf.extend_from_slice(b",\"sun_caution\":");
        buf.extend_from_slice(if r.sun_caution { b"true" } else { b"false" });
        buf.push(b'}');
    }
}
