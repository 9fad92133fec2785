//! Targets files: CSV with a header row, or TOML with `[[target]]` tables.
//!
//! Required fields: `name`, `ra`, `dec` (ICRS, decimal degrees or sexagesimal),
//! and `kind` (`parallax`, `pulsator`, `transient`, `plain`; default `plain`).
//! Kind fields carry their unit in their name (see DESIGN.md). A bad row is
//! reported with its file, line and field, and the good rows still load.

use crate::astro::frames::CatalogPlace;
use crate::astro::time::{Instant, check_jd_in_span, parse_instant};
use crate::error::{Location, Result, RungError};
use crate::io::angles::{parse_dec_deg, parse_ra_deg};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// Earliest accepted catalogue epoch `epoch_yr` (Julian year, TT); rung's valid span starts 1960-01-01.
pub const VALID_FROM_EPOCH_YR: f64 = 1960.0;
/// Latest accepted catalogue epoch `epoch_yr` (Julian year, TT); rung's valid span ends with 2099.
pub const VALID_TO_EPOCH_YR: f64 = 2100.0;

/// Longest accepted field, bytes. Longer fields are rejected, not loaded.
pub const MAX_FIELD_BYTES: usize = 4096;
/// Photometric bands a target may name.
pub const BANDS: [&str; 5] = ["U", "B", "V", "R", "I"];

/// Which distance method a target is for.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, serde::Deserialize, PartialOrd, Ord,
)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// Trigonometric parallax.
    Parallax,
    /// Pulsating star (period–luminosity).
    Pulsator,
    /// Thermonuclear supernova (standardized candle).
    Transient,
    /// Visibility only.
    Plain,
}

impl Kind {
    /// Parse the `kind` field.
    pub fn parse(s: &str) -> Option<Kind> {
        match s.trim().to_ascii_lowercase().as_str() {
            "parallax" => Some(Kind::Parallax),
            "pulsator" => Some(Kind::Pulsator),
            "transient" => Some(Kind::Transient),
            "plain" | "" => Some(Kind::Plain),
            _ => None,
        }
    }
    /// The lower-case name.
    pub fn as_str(&self) -> &'static str {
        match self {
            Kind::Parallax => "parallax",
            Kind::Pulsator => "pulsator",
            Kind::Transient => "transient",
            Kind::Plain => "plain",
        }
    }
}

/// One target of a programme.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Target {
    /// Name, unique in the file.
    pub name: String,
    /// ICRS right ascension, degrees (epoch J2000.0 unless `epoch_yr` says otherwise).
    pub ra_deg: f64,
    /// ICRS declination, degrees.
    pub dec_deg: f64,
    /// Method.
    pub kind: Kind,
    /// Expected parallax, milliarcseconds.
    pub parallax_mas: Option<f64>,
    /// Proper motion in RA, μα* = μα cos δ, mas/yr.
    pub pm_ra_masyr: f64,
    /// Proper motion in Dec, mas/yr.
    pub pm_dec_masyr: f64,
    /// Epoch of the catalogue position (Julian year, TT), default 2000.0.
    pub epoch_yr: f64,
    /// Magnitude in `band` (parallax targets, or plain).
    pub mag: Option<f64>,
    /// Photometric band.
    pub band: String,
    /// Pulsation period, days.
    pub period_d: Option<f64>,
    /// Epoch of maximum light, BJD_TDB.
    pub epoch_max_bjd: Option<f64>,
    /// Period uncertainty, days.
    pub period_err_d: Option<f64>,
    /// Peak-to-peak amplitude, mag.
    pub amplitude_mag: Option<f64>,
    /// Intensity-mean magnitude, mag.
    pub mean_mag: Option<f64>,
    /// Discovery instant (transients).
    pub discovered: Option<Instant>,
    /// Expected peak magnitude (transients).
    pub peak_mag: Option<f64>,
    /// Magnitude at discovery (transients).
    pub mag_now: Option<f64>,
    /// Redshift (transients).
    pub redshift: Option<f64>,
    /// Foreground extinction in `band`, mag (default 0).
    pub extinction_mag: f64,
    /// Distance-precision goal, percent.
    pub goal_pct: Option<f64>,
    /// Priority (higher first), default 1.
    pub priority: f64,
    /// Free notes.
    pub notes: String,
}

impl Target {
    /// A plain target at ICRS degrees.
    pub fn plain(name: &str, ra_deg: f64, dec_deg: f64) -> Self {
        Target {
            name: name.to_string(),
            ra_deg,
            dec_deg,
            kind: Kind::Plain,
            parallax_mas: None,
            pm_ra_masyr: 0.0,
            pm_dec_masyr: 0.0,
            epoch_yr: 2000.0,
            mag: None,
            band: "V".into(),
            period_d: None,
            epoch_max_bjd: None,
            period_err_d: None,
            amplitude_mag: None,
            mean_mag: None,
            discovered: None,
            peak_mag: None,
            mag_now: None,
            redshift: None,
            extinction_mag: 0.0,
            goal_pct: None,
            priority: 1.0,
            notes: String::new(),
        }
    }

    /// The catalogue place with space motion, at epoch J2000.0 as SOFA `atciq`
    /// wants it (moved from `epoch_yr` with SOFA `pmsafe` when that differs).
    pub fn place(&self) -> CatalogPlace {
        let mas = (1e-3f64 / 3600.0).to_radians();
        let dec = self.dec_deg.to_radians();
        let cd = dec.cos().max(1e-9);
        let p = CatalogPlace {
            ra_rad: self.ra_deg.to_radians(),
            dec_rad: dec,
            pm_ra_rad_yr: self.pm_ra_masyr * mas / cd,
            pm_dec_rad_yr: self.pm_dec_masyr * mas,
            parallax_arcsec: self.parallax_mas.unwrap_or(0.0).max(0.0) * 1e-3,
            rv_kms: 0.0,
        };
        if (self.epoch_yr - 2000.0).abs() < 1e-9 {
            return p;
        }
        let (e1a, e1b) = sofars::cal::epj2jd(self.epoch_yr);
        match sofars::astro::pmsafe(
            p.ra_rad,
            p.dec_rad,
            p.pm_ra_rad_yr,
            p.pm_dec_rad_yr,
            p.parallax_arcsec,
            p.rv_kms,
            e1a,
            e1b,
            2451545.0,
            0.0,
        ) {
            Ok((v, _)) => CatalogPlace {
                ra_rad: v[0],
                dec_rad: v[1],
                pm_ra_rad_yr: v[2],
                pm_dec_rad_yr: v[3],
                parallax_arcsec: v[4],
                rv_kms: v[5],
            },
            Err(_) => p,
        }
    }
}

/// Targets read from a file, with the rows that were refused.
#[derive(Debug, Default)]
pub struct Loaded {
    /// Good targets, in file order.
    pub targets: Vec<Target>,
    /// One error per refused row, with file, line and field.
    pub problems: Vec<RungError>,
}

/// `line` 0 means "not known" and is left out of the message.
fn loc(file: &Path, line: usize, field: &str) -> Location {
    Location {
        file: Some(file.to_path_buf()),
        line: (line > 0).then_some(line),
        field: if field.is_empty() {
            None
        } else {
            Some(field.to_string())
        },
    }
}

/// The values of one row by known field (index into [`KNOWN`]); the first
/// occurrence of a repeated field wins.
type Slots<'a> = [Option<&'a str>; KNOWN.len()];

fn slot_of(key: &str) -> Option<usize> {
    KNOWN.iter().position(|k| *k == key)
}

fn num(s: &Slots, i: usize) -> std::result::Result<Option<f64>, (String, String)> {
    match s[i].map(str::trim) {
        None | Some("") => Ok(None),
        Some(v) => match v.parse::<f64>() {
            Ok(x) if x.is_finite() => Ok(Some(x)),
            _ => Err((
                KNOWN[i].to_string(),
                format!("'{}' is not a finite number", cut(v)),
            )),
        },
    }
}

fn text<'a>(s: &Slots<'a>, i: usize) -> Option<&'a str> {
    s[i].map(str::trim).filter(|v| !v.is_empty())
}

fn cut(s: &str) -> String {
    let c: String = s.chars().take(40).collect();
    if s.chars().count() > 40 {
        format!("{c}…")
    } else {
        c
    }
}

const KNOWN: [&str; 24] = [
    "name",
    "ra",
    "dec",
    "kind",
    "parallax_mas",
    "pm_ra_masyr",
    "pm_dec_masyr",
    "epoch_yr",
    "mag",
    "band",
    "period_d",
    "epoch_max_bjd",
    "period_err_d",
    "amplitude_mag",
    "mean_mag",
    "discovered",
    "peak_mag",
    "mag_now",
    "redshift",
    "extinction_mag",
    "goal_pct",
    "priority",
    "notes",
    "id",
];

// Positions in KNOWN of the fields read by name.
const F_NAME: usize = 0;
const F_RA: usize = 1;
const F_DEC: usize = 2;
const F_KIND: usize = 3;
const F_PARALLAX_MAS: usize = 4;
const F_PM_RA_MASYR: usize = 5;
const F_PM_DEC_MASYR: usize = 6;
const F_EPOCH_YR: usize = 7;
const F_MAG: usize = 8;
const F_BAND: usize = 9;
const F_PERIOD_D: usize = 10;
const F_EPOCH_MAX_BJD: usize = 11;
const F_PERIOD_ERR_D: usize = 12;
const F_AMPLITUDE_MAG: usize = 13;
const F_MEAN_MAG: usize = 14;
const F_DISCOVERED: usize = 15;
const F_PEAK_MAG: usize = 16;
const F_MAG_NOW: usize = 17;
const F_REDSHIFT: usize = 18;
const F_EXTINCTION_MAG: usize = 19;
const F_GOAL_PCT: usize = 20;
const F_PRIORITY: usize = 21;
const F_NOTES: usize = 22;

/// Build a target from (field, value) pairs; the error names the field.
pub fn target_from_fields(
    fields: &[(String, String)],
) -> std::result::Result<Target, (String, String)> {
    for (k, v) in fields {
        check_len(k, v)?;
    }
    let mut slots: Slots = [None; KNOWN.len()];
    for (k, v) in fields {
        if let Some(i) = slot_of(k) {
            slots[i].get_or_insert(v.as_str());
        }
    }
    target_from_slots(&slots)
}

fn check_len(key: &str, v: &str) -> std::result::Result<(), (String, String)> {
    if v.len() > MAX_FIELD_BYTES {
        return Err((
            key.to_string(),
            format!(
                "{} bytes is longer than the {MAX_FIELD_BYTES}-byte limit",
                v.len()
            ),
        ));
    }
    Ok(())
}

fn target_from_slots(slots: &Slots) -> std::result::Result<Target, (String, String)> {
    let fields = slots;
    let name = text(fields, F_NAME)
        .ok_or_else(|| ("name".to_string(), "is missing or empty".to_string()))?;
    let ra_t = text(fields, F_RA).ok_or_else(|| ("ra".to_string(), "is missing".to_string()))?;
    let dec_t = text(fields, F_DEC).ok_or_else(|| ("dec".to_string(), "is missing".to_string()))?;
    let ra = parse_ra_deg(ra_t).map_err(|e| ("ra".to_string(), e.to_string()))?;
    let dec = parse_dec_deg(dec_t).map_err(|e| ("dec".to_string(), e.to_string()))?;
    let kind_t = text(fields, F_KIND).unwrap_or("plain");
    let kind = Kind::parse(kind_t).ok_or_else(|| {
        (
            "kind".to_string(),
            format!(
                "'{}' is not one of parallax, pulsator, transient, plain",
                cut(kind_t)
            ),
        )
    })?;
    let mut t = Target::plain(name, ra, dec);
    t.kind = kind;
    t.parallax_mas = num(fields, F_PARALLAX_MAS)?;
    t.pm_ra_masyr = num(fields, F_PM_RA_MASYR)?.unwrap_or(0.0);
    t.pm_dec_masyr = num(fields, F_PM_DEC_MASYR)?.unwrap_or(0.0);
    t.epoch_yr = num(fields, F_EPOCH_YR)?.unwrap_or(2000.0);
    t.mag = num(fields, F_MAG)?;
    t.period_d = num(fields, F_PERIOD_D)?;
    t.epoch_max_bjd = num(fields, F_EPOCH_MAX_BJD)?;
    t.period_err_d = num(fields, F_PERIOD_ERR_D)?;
    t.amplitude_mag = num(fields, F_AMPLITUDE_MAG)?;
    t.mean_mag = num(fields, F_MEAN_MAG)?;
    t.peak_mag = num(fields, F_PEAK_MAG)?;
    t.mag_now = num(fields, F_MAG_NOW)?;
    t.redshift = num(fields, F_REDSHIFT)?;
    t.extinction_mag = num(fields, F_EXTINCTION_MAG)?.unwrap_or(0.0);
    t.goal_pct = num(fields, F_GOAL_PCT)?;
    t.priority = num(fields, F_PRIORITY)?.unwrap_or(1.0);
    t.notes = text(fields, F_NOTES).unwrap_or("").to_string();
    if let Some(b) = text(fields, F_BAND) {
        let up = b.to_ascii_uppercase();
        if !BANDS.contains(&up.as_str()) {
            return Err((
                "band".into(),
                format!("'{}' is not one of U, B, V, R, I", cut(b)),
            ));
        }
        t.band = up;
    }
    if let Some(d) = text(fields, F_DISCOVERED) {
        t.discovered =
            Some(parse_instant(d).map_err(|e| ("discovered".to_string(), e.to_string()))?);
    }
    let bad = |f: &str, why: &str| Err((f.to_string(), why.to_string()));
    if !(VALID_FROM_EPOCH_YR..=VALID_TO_EPOCH_YR).contains(&t.epoch_yr) {
        return bad(
            "epoch_yr",
            "must be a Julian year within rung's valid span, 1960.0 to 2100.0",
        );
    }
    for (f, v) in [
        ("pm_ra_masyr", t.pm_ra_masyr),
        ("pm_dec_masyr", t.pm_dec_masyr),
    ] {
        if v.abs() > 20_000.0 {
            return bad(f, "is faster than 20 arcsec/yr, beyond any star");
        }
    }
    if t.extinction_mag < 0.0 || t.extinction_mag > 20.0 {
        return bad("extinction_mag", "must be within 0..20 mag");
    }
    if let Some(g) = t.goal_pct
        && (g <= 0.0 || g > 100.0)
    {
        return bad("goal_pct", "must be a percentage in (0, 100]");
    }
    for (f, v) in [
        ("mag", t.mag),
        ("mean_mag", t.mean_mag),
        ("peak_mag", t.peak_mag),
        ("mag_now", t.mag_now),
    ] {
        if let Some(m) = v
            && !(-2.0..=30.0).contains(&m)
        {
            return bad(f, "must be a magnitude within -2..30");
        }
    }
    match kind {
        Kind::Parallax => match t.parallax_mas {
            None => return bad("parallax_mas", "is required for a parallax target"),
            Some(p) if p <= 0.0 => {
                return bad("parallax_mas", "must be positive (expected parallax, mas)");
            }
            Some(p) if p > 1000.0 => {
                return bad("parallax_mas", "exceeds 1000 mas: no star is that close");
            }
            _ => {}
        },
        Kind::Pulsator => {
            match t.period_d {
                None => return bad("period_d", "is required for a pulsator"),
                Some(p) if p <= 0.0 => return bad("period_d", "must be positive (days)"),
                _ => {}
            }
            match t.epoch_max_bjd {
                None => {
                    return bad(
                        "epoch_max_bjd",
                        "is required for a pulsator (BJD_TDB of a maximum)",
                    );
                }
                Some(e) if !(2_400_000.0..=2_500_000.0).contains(&e) => {
                    return bad("epoch_max_bjd", "must be a full BJD such as 2461000.123");
                }
                Some(e) if check_jd_in_span(e, "").is_err() => {
                    return bad(
                        "epoch_max_bjd",
                        "must lie within rung's valid span 1960-01-01 to 2099-12-31 (BJD 2436934.5 to 2488069.5)",
                    );
                }
                _ => {}
            }
            if let Some(e) = t.period_err_d
                && e < 0.0
            {
                return bad("period_err_d", "must not be negative");
            }
            if let Some(a) = t.amplitude_mag
                && a < 0.0
            {
                return bad("amplitude_mag", "must not be negative");
            }
        }
        Kind::Transient => {
            if t.discovered.is_none() {
                return bad("discovered", "is required for a transient (ISO 8601 time)");
            }
            if t.peak_mag.is_none() && t.mag_now.is_none() {
                return bad("peak_mag", "a transient needs peak_mag or mag_now");
            }
            if let Some(z) = t.redshift
                && !(0.0..=3.0).contains(&z)
            {
                return bad("redshift", "must be within 0..3");
            }
        }
        Kind::Plain => {}
    }
    Ok(t)
}

/// Longest accepted physical line of a CSV targets file, bytes. A longer line
/// must hold a field over [`MAX_FIELD_BYTES`] (24 known columns of at most
/// 4096 bytes fit well inside it); it is skipped without being held in memory.
pub const MAX_LINE_BYTES: usize = 256 * 1024;
/// Largest TOML targets file, bytes (TOML is parsed whole; use CSV for more).
pub const MAX_TOML_BYTES: u64 = 64 * 1024 * 1024;
/// How often (bytes read) the progress callback is called while streaming.
const PROGRESS_STEP_BYTES: u64 = 1024 * 1024;

/// Replaces an over-long physical line in the byte stream the CSV reader sees.
/// Control characters keep it from being mistaken for real data.
const OVERLONG_MARK: &str = "\u{1}rung:overlong-line\u{1}";

/// A reader that passes a CSV file through line by line, replacing any line
/// longer than [`MAX_LINE_BYTES`] by [`OVERLONG_MARK`] (its bytes are skipped,
/// never stored), and counting the bytes read for the progress callback.
struct LineCap<R: std::io::BufRead> {
    inner: R,
    pending: Vec<u8>,
    pos: usize,
    read: std::rc::Rc<std::cell::Cell<u64>>,
    done: bool,
    /// Whether the lines so far leave the reader inside a quoted field
    /// (parity of the quote characters seen).
    quoted: bool,
    /// How many [`OVERLONG_MARK`]s have been put in the stream.
    marks: std::rc::Rc<std::cell::Cell<u64>>,
}

impl<R: std::io::BufRead> LineCap<R> {
    fn refill(&mut self) -> std::io::Result<()> {
        use std::io::{BufRead as _, Read as _};
        self.pending.clear();
        self.pos = 0;
        // Fast path: one line of at most MAX_LINE_BYTES (+ its newline),
        // found with the standard library's memchr.
        let limit = MAX_LINE_BYTES + 1;
        let n = (&mut self.inner)
            .take(limit as u64)
            .read_until(b'\n', &mut self.pending)?;
        self.read.set(self.read.get() + n as u64);
        if n == 0 {
            self.done = true;
            return Ok(());
        }
        let comment = self.pending[0] == b'#';
        let count_quotes = |b: &[u8]| {
            if b.contains(&b'"') {
                b.iter().filter(|c| **c == b'"').count()
            } else {
                0
            }
        };
        let mut quotes_in_line = count_quotes(&self.pending);
        let overlong = n == limit && self.pending.last() != Some(&b'\n');
        if overlong {
            // Skip the rest of the line without storing it, counting its quotes.
            self.pending.clear();
            loop {
                let buf = self.inner.fill_buf()?;
                if buf.is_empty() {
                    self.done = true;
                    break;
                }
                let (take, newline) = match buf.iter().position(|b| *b == b'\n') {
                    Some(i) => (i + 1, true),
                    None => (buf.len(), false),
                };
                quotes_in_line += count_quotes(&buf[..take]);
                self.inner.consume(take);
                self.read.set(self.read.get() + take as u64);
                if newline {
                    break;
                }
            }
            self.marks.set(self.marks.get() + 1);
        }
        if overlong && comment && !self.quoted {
            // An over-long comment line is still a comment.
            self.marks.set(self.marks.get() - 1);
            self.pending.extend_from_slice(b"#\n");
        } else if overlong {
            // Keep the quoting state the CSV reader would have had after the
            // skipped line (an odd number of quotes flips it), so that the rows
            // after it are read as they stand.
            let entering_quoted = self.quoted;
            let flips = quotes_in_line % 2 == 1;
            if flips && !entering_quoted {
                self.pending.push(b'"');
            }
            self.pending.extend_from_slice(OVERLONG_MARK.as_bytes());
            if flips && entering_quoted {
                self.pending.push(b'"');
            }
            self.pending.push(b'\n');
        }
        if quotes_in_line % 2 == 1 && (self.quoted || !comment) {
            self.quoted = !self.quoted;
        }
        Ok(())
    }
}

impl<R: std::io::BufRead> std::io::Read for LineCap<R> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        if self.pos >= self.pending.len() {
            if self.done {
                return Ok(0);
            }
            self.refill()?;
        }
        let n = (self.pending.len() - self.pos).min(out.len());
        out[..n].copy_from_slice(&self.pending[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}

/// Names already used, kept compactly for the duplicate check.
type Seen = std::collections::HashSet<Box<str>>;

/// The CSV reader behind [`parse_csv`], [`stream_csv`] and [`load`]: reads
/// `reader` record by record, never holding more than one line of at most
/// [`MAX_LINE_BYTES`]. `total_bytes` is passed to `on_progress` with the bytes
/// read so far (about every MiB, and once at the end).
pub fn stream_csv_reader<R: std::io::Read>(
    reader: R,
    file: &Path,
    total_bytes: u64,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
    on_progress: &mut dyn FnMut(u64, u64),
) {
    let read = std::rc::Rc::new(std::cell::Cell::new(0u64));
    let marks = std::rc::Rc::new(std::cell::Cell::new(0u64));
    let mut marks_found = 0u64;
    let capped = LineCap {
        inner: std::io::BufReader::with_capacity(64 * 1024, reader),
        pending: Vec::new(),
        pos: 0,
        read: read.clone(),
        done: false,
        quoted: false,
        marks: marks.clone(),
    };
    let mut rdr = csv::ReaderBuilder::new()
        .flexible(true)
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(capped);
    // The header's own line (comment lines may come before it).
    let (headers, hline): (Vec<String>, usize) = match rdr.headers() {
        Ok(h) if h.iter().any(|f| f.contains(OVERLONG_MARK)) => {
            on_problem(RungError::InFile {
                loc: loc(file, h.position().map_or(1, |p| p.line() as usize), ""),
                msg: format!("the header line is longer than {MAX_LINE_BYTES} bytes"),
            });
            return;
        }
        Ok(h) => (h.iter().map(|s| s.trim().to_ascii_lowercase()).collect(), 0),
        Err(e) => {
            on_problem(RungError::InFile {
                loc: loc(file, 1, ""),
                msg: format!("unreadable header: {e}"),
            });
            return;
        }
    };
    // After the header the reader stands at the start of the next line.
    let hline = if hline == 0 {
        (rdr.position().line() as usize).saturating_sub(1).max(1)
    } else {
        hline
    };
    for need in ["name", "ra", "dec"] {
        if !headers.iter().any(|h| h == need) {
            on_problem(RungError::InFile {
                loc: loc(file, hline, need),
                msg: format!("the header has no '{need}' column (required: name, ra, dec)"),
            });
            return;
        }
    }
    let col_slot: Vec<Option<usize>> = headers.iter().map(|h| slot_of(h)).collect();
    let mut seen = Seen::new();
    let mut rec = csv::StringRecord::new();
    let mut last_progress = 0u64;
    loop {
        let line_before = rdr.position().line() as usize;
        match rdr.read_record(&mut rec) {
            Ok(false) => break,
            Ok(true) => {
                let line = rec
                    .position()
                    .map(|p| p.line() as usize)
                    .unwrap_or(line_before);
                // Look for the mark only while one is in the stream unread
                // (the reader runs ahead, so it may be in a later record).
                let mark_at = if marks.get() > marks_found {
                    rec.iter().position(|f| f.contains(OVERLONG_MARK))
                } else {
                    None
                };
                if let Some(i) = mark_at {
                    marks_found += rec
                        .iter()
                        .map(|f| f.matches(OVERLONG_MARK).count() as u64)
                        .sum::<u64>();
                    // The mark sits on the over-long physical line itself.
                    let extra = rec
                        .iter()
                        .take(i)
                        .map(|f| f.matches('\n').count())
                        .sum::<usize>()
                        + rec.get(i).map_or(0, |f| {
                            f[..f.find(OVERLONG_MARK).unwrap_or(0)]
                                .matches('\n')
                                .count()
                        });
                    let field = if rec.len() == headers.len() {
                        headers[i].as_str()
                    } else {
                        ""
                    };
                    on_problem(RungError::InFile {
                        loc: loc(file, line + extra, field),
                        msg: format!(
                            "line is longer than {MAX_LINE_BYTES} bytes: a field exceeds the {MAX_FIELD_BYTES}-byte limit; row skipped unread"
                        ),
                    });
                } else if rec.len() != headers.len() {
                    on_problem(RungError::InFile {
                        loc: loc(file, line, ""),
                        msg: format!(
                            "row has {} fields but the header has {}",
                            rec.len(),
                            headers.len()
                        ),
                    });
                } else {
                    // Straight into the slots, no copy of the row.
                    let mut slots: Slots = [None; KNOWN.len()];
                    let mut r = Ok(());
                    for (j, v) in rec.iter().enumerate() {
                        r = check_len(&headers[j], v);
                        if r.is_err() {
                            break;
                        }
                        if let Some(i) = col_slot[j] {
                            slots[i].get_or_insert(v);
                        }
                    }
                    let t = r.and_then(|_| target_from_slots(&slots));
                    push_target(&mut seen, t, file, line, on_target, on_problem);
                }
            }
            Err(e) => {
                let line = e
                    .position()
                    .map(|p| p.line() as usize)
                    .unwrap_or(line_before);
                let msg = match e.kind() {
                    csv::ErrorKind::Utf8 { err, .. } => format!(
                        "field {} is not UTF-8 text (save the file as UTF-8); row skipped",
                        err.field() + 1
                    ),
                    _ => format!("unreadable row: {e}"),
                };
                on_problem(RungError::InFile {
                    loc: loc(file, line, ""),
                    msg,
                });
                if matches!(e.kind(), csv::ErrorKind::Io(_)) {
                    break;
                }
            }
        }
        let r = read.get();
        if r >= last_progress + PROGRESS_STEP_BYTES {
            last_progress = r;
            on_progress(r, total_bytes.max(r));
        }
    }
    let r = read.get();
    on_progress(r, total_bytes.max(r));
}

/// Stream a CSV targets file: each good target goes to `on_target` and each
/// refused row to `on_problem`, in file order, with memory bounded by one line
/// ([`MAX_LINE_BYTES`]) plus the set of names seen (for the duplicate check),
/// whatever the size of the file.
pub fn stream_csv(
    path: &Path,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
) -> Result<()> {
    stream_csv_progress(path, on_target, on_problem, &mut |_, _| {})
}

/// [`stream_csv`] with a progress callback `on_progress(bytes_read, total_bytes)`.
pub fn stream_csv_progress(
    path: &Path,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
    on_progress: &mut dyn FnMut(u64, u64),
) -> Result<()> {
    let f = open_file(path)?;
    let total = f.metadata().map(|m| m.len()).unwrap_or(0);
    stream_csv_reader(f, path, total, on_target, on_problem, on_progress);
    Ok(())
}

fn open_file(path: &Path) -> Result<std::fs::File> {
    let meta = std::fs::metadata(path).map_err(|e| RungError::io(path, e))?;
    if meta.is_dir() {
        return Err(RungError::invalid(
            "targets file",
            format!("{} is a folder", path.display()),
        ));
    }
    std::fs::File::open(path).map_err(|e| RungError::io(path, e))
}

/// Parse CSV text (header row first).
pub fn parse_csv(text: &str, file: &Path) -> Loaded {
    let mut targets = Vec::new();
    let mut problems = Vec::new();
    stream_csv_reader(
        text.as_bytes(),
        file,
        text.len() as u64,
        &mut |t| targets.push(t),
        &mut |p| problems.push(p),
        &mut |_, _| {},
    );
    Loaded { targets, problems }
}

fn push_target(
    seen: &mut Seen,
    target: std::result::Result<Target, (String, String)>,
    file: &Path,
    line: usize,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
) {
    match target {
        Ok(t) => {
            if seen.contains(t.name.as_str()) {
                on_problem(RungError::InFile {
                    loc: loc(file, line, "name"),
                    msg: format!("'{}' is already used by an earlier row", cut(&t.name)),
                });
            } else {
                seen.insert(t.name.as_str().into());
                on_target(t);
            }
        }
        Err((field, msg)) => on_problem(RungError::InFile {
            loc: loc(file, line, &field),
            msg,
        }),
    }
}

/// Parse TOML text: `[[target]]` tables with the same field names as the CSV columns.
pub fn parse_toml(text: &str, file: &Path) -> Loaded {
    let mut out = Loaded::default();
    let doc: toml::Table = match text.parse() {
        Ok(d) => d,
        Err(e) => {
            let line = e
                .span()
                .map(|s| crate::error::line_at(text, s.start))
                .unwrap_or(1);
            out.problems.push(RungError::InFile {
                loc: loc(file, line, ""),
                msg: format!("not valid TOML: {}", e.message()),
            });
            return out;
        }
    };
    let Some(list) = doc.get("target").and_then(|v| v.as_array()) else {
        out.problems.push(RungError::InFile {
            loc: loc(file, 1, "target"),
            msg: "no [[target]] tables found".into(),
        });
        return out;
    };
    // Lines of the [[target]] headers, to place errors.
    let header_lines = array_table_lines(text, "target", list.len());
    let mut seen = Seen::new();
    let Loaded { targets, problems } = &mut out;
    for (i, item) in list.iter().enumerate() {
        let line = header_lines.get(i).copied().unwrap_or(0);
        let Some(tab) = item.as_table() else {
            problems.push(RungError::InFile {
                loc: loc(file, line, ""),
                msg: "not a table".into(),
            });
            continue;
        };
        let mut fields = Vec::new();
        let mut bad = None;
        for (k, v) in tab {
            let s = match v {
                toml::Value::String(s) => s.clone(),
                toml::Value::Integer(i) => i.to_string(),
                toml::Value::Float(f) => f.to_string(),
                toml::Value::Boolean(b) => b.to_string(),
                toml::Value::Datetime(d) => d.to_string(),
                _ => {
                    bad = Some(k.clone());
                    String::new()
                }
            };
            fields.push((k.to_ascii_lowercase(), s));
        }
        if let Some(k) = bad {
            problems.push(RungError::InFile {
                loc: loc(file, line, &k),
                msg: "must be a single value".into(),
            });
            continue;
        }
        push_target(
            &mut seen,
            target_from_fields(&fields),
            file,
            line,
            &mut |t| targets.push(t),
            &mut |p| problems.push(p),
        );
    }
    out
}

/// The 1-based lines of the `[[name]]` headers of a TOML text, one per
/// table of the array (spaces inside the brackets, quoted names and trailing
/// comments allowed). When they cannot be matched one to one with the
/// `count` tables (tables written inline, or a header-like line inside a
/// multi-line string), all are 0, "line not known", rather than wrong.
pub(crate) fn array_table_lines(text: &str, name: &str, count: usize) -> Vec<usize> {
    let lines: Vec<usize> = text
        .lines()
        .enumerate()
        .filter(|(_, l)| {
            let t = l.trim();
            t.strip_prefix("[[")
                .and_then(|r| r.split_once("]]"))
                .is_some_and(|(inner, rest)| {
                    let inner = inner.trim();
                    let rest = rest.trim_start();
                    (inner == name || inner.trim_matches(['"', '\'']) == name)
                        && (rest.is_empty() || rest.starts_with('#'))
                })
        })
        .map(|(i, _)| i + 1)
        .collect();
    if lines.len() == count {
        lines
    } else {
        vec![0; count]
    }
}

/// Unknown column names in a CSV header (reported as warnings by the command line).
pub fn unknown_columns(headers: &[String]) -> Vec<String> {
    headers
        .iter()
        .filter(|h| !KNOWN.contains(&h.as_str()))
        .cloned()
        .collect()
}

/// Read a targets file (by extension: `.toml`, else CSV). CSV is always read
/// as a stream (see [`stream_csv`]), so even a file of millions of rows never
/// has its text in memory; TOML is parsed whole and refused above
/// [`MAX_TOML_BYTES`].
pub fn load(path: &Path) -> Result<Loaded> {
    load_with_progress(path, &mut |_, _| {})
}

/// [`load`] with a progress callback `on_progress(bytes_read, total_bytes)`
/// (called about every MiB while a CSV file streams, and once at the end).
pub fn load_with_progress(path: &Path, on_progress: &mut dyn FnMut(u64, u64)) -> Result<Loaded> {
    let is_toml = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("toml"));
    if !is_toml {
        let mut targets = Vec::new();
        let mut problems = Vec::new();
        stream_csv_progress(
            path,
            &mut |t| targets.push(t),
            &mut |p| problems.push(p),
            on_progress,
        )?;
        return Ok(Loaded { targets, problems });
    }
    let f = open_file(path)?;
    let len = f.metadata().map(|m| m.len()).unwrap_or(0);
    if len > MAX_TOML_BYTES {
        return Err(RungError::InFile {
            loc: Location {
                file: Some(PathBuf::from(path)),
                line: None,
                field: None,
            },
            msg: format!(
                "a TOML targets file is read whole and may hold at most {} MiB ({len} bytes given); use CSV for larger programmes",
                MAX_TOML_BYTES / (1024 * 1024)
            ),
        });
    }
    drop(f);
    let bytes = std::fs::read(path).map_err(|e| RungError::io(path, e))?;
    let text = String::from_utf8(bytes).map_err(|e| RungError::InFile {
        loc: Location {
            file: Some(PathBuf::from(path)),
            line: Some(
                1 + e.as_bytes()[..e.utf8_error().valid_up_to()]
                    .iter()
                    .filter(|b| **b == b'\n')
                    .count(),
            ),
            field: None,
        },
        msg: "is not UTF-8 text".into(),
    })?;
    on_progress(len, len);
    Ok(parse_toml(&text, path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn broken_row_is_reported_and_good_rows_load() {
        let csv = "name,ra,dec,kind,parallax_mas\nA,10.0,-20,parallax,12.5\nB,25:00:00,10,plain,\nC,05:00:00,+10:00:00,plain,\nD,1,2,parallax,-3\n";
        let l = parse_csv(csv, Path::new("t.csv"));
        assert_eq!(l.targets.len(), 2);
        assert_eq!(l.problems.len(), 2);
        let m = l.problems[0].to_string();
        assert!(
            m.contains("t.csv") && m.contains("line 3") && m.contains("field 'ra'"),
            "{m}"
        );
        let m = l.problems[1].to_string();
        assert!(m.contains("line 5") && m.contains("parallax_mas"), "{m}");
    }

    #[test]
    fn toml_targets() {
        let t = "[[target]]\nname = \"A\"\nra = \"05:34:31.9\"\ndec = 22.0\nkind = \"pulsator\"\nperiod_d = 5.3\nepoch_max_bjd = 2461000.5\n\n[[target]]\nname = \"B\"\nra = 1\ndec = 100\n";
        let l = parse_toml(t, Path::new("t.toml"));
        assert_eq!(l.targets.len(), 1);
        let m = l.problems[0].to_string();
        assert!(m.contains("line 9") && m.contains("dec"), "{m}");
    }

    #[test]
    fn huge_field_rejected() {
        let big = "x".repeat(MAX_FIELD_BYTES + 1);
        let csv = format!("name,ra,dec\n{big},1,2\nok,1,2\n");
        let l = parse_csv(&csv, Path::new("t.csv"));
        assert_eq!(l.targets.len(), 1);
        assert!(l.problems[0].to_string().contains("limit"));
    }
}
