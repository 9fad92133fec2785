//! `rung season`: every target on every night of a date range.
//!
//! Rows stream out one night at a time (formatted on all cores), so a
//! 10 000-target, one-year run holds one night of rows in memory. With
//! `--summary` (and for the table, which is the summary) the targets file is
//! read as a stream and scanned [`SUMMARY_CHUNK`] targets at a time, each
//! chunk's totals written before the next is read, so memory does not grow
//! with the number of targets (beyond the names the reader keeps for its
//! duplicate check).

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

/// Targets scanned at once by `--summary` (about 460 bytes each while
/// scanned: 30 MB for a chunk). Each chunk computes the nights' Sun and Moon
/// again, about 0.7 ms a night against about 0.25 µs a target-night, so a file
/// of more than one chunk takes about 5 % more CPU time than one scan of every
/// target would (measured 2026-12-02, see the README's performance table).
const SUMMARY_CHUNK: usize = 1 << 16;

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
    // Without --csv or --json the answer is the table of totals.
    if a.summary || !(a.csv || a.json) {
        return run_summary(&a, &site, &c, from, to);
    }
    // The rows need every target on every night: keep each target's place and
    // its name as written out, not the whole target.
    let mut places = Vec::new();
    let mut out_names: Vec<Vec<u8>> = Vec::new();
    super::stream_targets(&a.targets, &mut |t| {
        places.push(t.place());
        out_names.push(if a.json {
            serde_json::to_string(&t.name)
                .unwrap_or_else(|_| "\"?\"".into())
                .into_bytes()
        } else {
            csv_field(&t.name).into_owned().into_bytes()
        });
    })?;

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
    // the small buffer only gathers the header.
    let mut out = std::io::BufWriter::with_capacity(1 << 15, raw_stdout());
    let mut io_err: Option<std::io::Error> = None;
    {
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
        cautions += nr.rows.iter().filter(|r| r.sun_caution).count();
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
                        fmt.csv_row(buf, &out_names[r.target], r);
                    } else {
                        fmt.json_row(buf, &out_names[r.target], r);
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
    sun_caution(cautions, &site);
    let res = if a.json {
        out.write_all(b"]}\n")
    } else {
        Ok(())
    };
    match res.and_then(|_| out.flush()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        r => r.context("writing the season output"),
    }
}

fn sun_caution(cautions: usize, site: &rung::astro::site::Site) {
    if cautions > 0 {
        eprintln!(
            "rung: SUN CAUTION: {cautions} target-nights have a window with the Sun up and the target within the site's Sun-avoidance angle ({:.0}°); see the sun_caution column; the observatory's own safety rules prevail",
            site.sun_avoid_deg
        );
    }
}

/// `rung season --summary`: the targets stream from their file in chunks of
/// [`SUMMARY_CHUNK`]; each chunk is scanned over every night and its totals
/// written before the next chunk is read.
fn run_summary(
    a: &Args,
    site: &rung::astro::site::Site,
    c: &Constraints,
    from: chrono::NaiveDate,
    to: chrono::NaiveDate,
) -> Result<()> {
    let mut run = SummaryRun {
        a,
        site,
        c,
        from,
        to,
        out: std::io::BufWriter::with_capacity(1 << 16, raw_stdout()),
        places: Vec::with_capacity(SUMMARY_CHUNK),
        names: Vec::with_capacity(SUMMARY_CHUNK),
        written: 0,
        cautions: 0,
        failed: None,
    };
    super::stream_targets(&a.targets, &mut |t| run.push(t))?;
    run.flush_chunk();
    match run.failed.take() {
        Some(SummaryFailure::Output(e)) if e.kind() == std::io::ErrorKind::BrokenPipe => {
            return Ok(());
        }
        Some(SummaryFailure::Output(e)) => return Err(e).context("writing the season summary"),
        Some(SummaryFailure::Scan(e)) => return Err(e.into()),
        None => {}
    }
    sun_caution(run.cautions, site);
    let res = if a.json {
        run.out.write_all(b"\n  ]\n}\n")
    } else {
        Ok(())
    };
    match res.and_then(|_| run.out.flush()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        r => r.context("writing the season summary"),
    }
}

enum SummaryFailure {
    Output(std::io::Error),
    Scan(rung::RungError),
}

/// The state of a chunked `--summary`: the chunk being filled and what has
/// been written.
struct SummaryRun<'a, W: Write> {
    a: &'a Args,
    site: &'a rung::astro::site::Site,
    c: &'a Constraints,
    from: chrono::NaiveDate,
    to: chrono::NaiveDate,
    out: W,
    places: Vec<rung::astro::frames::CatalogPlace>,
    names: Vec<String>,
    /// Targets whose totals have been written.
    written: usize,
    cautions: usize,
    /// The first failure; the rest of the file is then read past unscanned.
    failed: Option<SummaryFailure>,
}

impl<W: Write> SummaryRun<'_, W> {
    fn push(&mut self, t: rung::io::targets::Target) {
        if self.failed.is_some() {
            return;
        }
        self.places.push(t.place());
        self.names.push(t.name);
        if self.places.len() >= SUMMARY_CHUNK {
            self.flush_chunk();
        }
    }

    /// Scan the chunk over every night and write its totals.
    fn flush_chunk(&mut self) {
        if self.places.is_empty() || self.failed.is_some() {
            return;
        }
        let mut summary = SeasonSummary::new(self.places.len());
        let mut cautions = 0;
        let scanned = season::scan(
            self.site,
            &self.places,
            self.from,
            self.to,
            self.c,
            |nr: &NightRows<'_>| {
                summary.add(nr);
                cautions += nr.rows.iter().filter(|r| r.sun_caution).count();
                ControlFlow::Continue(())
            },
        );
        if let Err(e) = scanned {
            self.failed = Some(SummaryFailure::Scan(e));
            return;
        }
        self.cautions += cautions;
        let totals = summary.finish();
        let res = (|| {
            if self.written == 0 {
                write_summary_head(&mut self.out, self.a, self.site, self.from, self.to, self.c)?;
            }
            for t in &totals {
                write_summary_row(
                    &mut self.out,
                    self.a,
                    &self.names[t.target],
                    t,
                    self.written + t.target == 0,
                )?;
            }
            Ok(())
        })();
        self.written += totals.len();
        self.places.clear();
        self.names.clear();
        if let Err(e) = res {
            self.failed = Some(SummaryFailure::Output(e));
        }
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

/// What comes before the first target's totals: the CSV header, the JSON
/// object's settings, or the table's title and column heads.
fn write_summary_head(
    out: &mut impl Write,
    a: &Args,
    site: &rung::astro::site::Site,
    from: chrono::NaiveDate,
    to: chrono::NaiveDate,
    c: &Constraints,
) -> std::io::Result<()> {
    if a.csv {
        return writeln!(out, "{SUMMARY_HEADER}");
    }
    if a.json {
        // Written by hand so that the list can stream: the object rung has
        // always written, with "summary" last.
        let n = |x: f64| rung::output::json_num(x).to_string();
        return write!(
            out,
            "{{\n  \"site\": {},\n  \"from\": \"{from}\",\n  \"to\": \"{to}\",\n  \"nights\": {},\n  \"min_alt_deg\": {},\n  \"sun_alt_deg\": {},\n  \"moon_sep_deg\": {},\n  \"summary\": [",
            serde_json::Value::from(site.name.as_str()),
            (to - from).num_days() + 1,
            n(c.min_alt_deg),
            n(c.sun_alt_deg),
            n(c.moon_sep_deg),
        );
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
    )
}

/// One target's totals as a CSV record, a JSON list item (`first`: the
/// list's first, without a leading comma) or a table line.
fn write_summary_row(
    out: &mut impl Write,
    a: &Args,
    name: &str,
    t: &TargetSummary,
    first: bool,
) -> std::io::Result<()> {
    let d = |x: Option<chrono::NaiveDate>| x.map(|d| d.to_string());
    if a.csv {
        return out.write_all(
            csv_record(&[
                name.to_string(),
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
        );
    }
    if a.json {
        let v = serde_json::json!({
            "target": name,
            "total_hours": t.total_hours,
            "nights_observable": t.nights_observable,
            "first_night": d(t.first_night),
            "last_night": d(t.last_night),
            "best_month": t.best_month_text(),
            "best_month_hours": t.best_month_hours,
            "best_airmass": t.best_airmass,
            "best_airmass_night": d(t.best_airmass_night),
        });
        let text = rung::output::json(&v).map_err(std::io::Error::other)?;
        out.write_all(if first { b"\n" } else { b",\n" })?;
        for (i, line) in text.lines().enumerate() {
            if i > 0 {
                out.write_all(b"\n")?;
            }
            write!(out, "    {line}")?;
        }
        return Ok(());
    }
    super::outln!(
        out,
        "  {:<20} {:>8.1} {:>6} {:>10} {:>10} {:>8} {:>7.1} {:>7}",
        name,
        t.total_hours,
        t.nights_observable,
        d(t.first_night).unwrap_or_else(|| "-".into()),
        d(t.last_night).unwrap_or_else(|| "-".into()),
        t.best_month_text().unwrap_or_else(|| "-".into()),
        t.best_month_hours,
        super::opt(t.best_airmass, 2),
    )
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
