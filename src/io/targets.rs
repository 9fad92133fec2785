//! Targets files: CSV with a header row, or TOML with `[[target]]` tables.
//!
//! Required fields: `name`, `ra`, `dec` (ICRS, decimal degrees or sexagesimal),
//! and `kind` (`parallax`, `pulsator`, `transient`, `plain`; default `plain`).
//! Kind fields carry their unit in their name (see DESIGN.md). A bad row is
//! reported with its file, line and field, and the good rows still load.

use crate::astro::frames::CatalogPlace;
use crate::astro::time::{Instant, parse_instant};
use crate::error::{Location, Result, RungError};
use crate::io::angles::{parse_dec_deg, parse_ra_deg};
use serde::Serialize;
use std::path::{Path, PathBuf};

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

fn loc(file: &Path, line: usize, field: &str) -> Location {
    Location {
        file: Some(file.to_path_buf()),
        line: Some(line),
        field: if field.is_empty() {
            None
        } else {
            Some(field.to_string())
        },
    }
}

fn num(
    fields: &[(String, String)],
    key: &str,
) -> std::result::Result<Option<f64>, (String, String)> {
    match fields.iter().find(|(k, _)| k == key) {
        None => Ok(None),
        Some((_, v)) if v.trim().is_empty() => Ok(None),
        Some((_, v)) => match v.trim().parse::<f64>() {
            Ok(x) if x.is_finite() => Ok(Some(x)),
            _ => Err((
                key.to_string(),
                format!("'{}' is not a finite number", cut(v)),
            )),
        },
    }
}

fn text<'a>(fields: &'a [(String, String)], key: &str) -> Option<&'a str> {
    fields
        .iter()
        .find(|(k, _)| k == key)
        .map(|(_, v)| v.trim())
        .filter(|v| !v.is_empty())
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

/// Build a target from (field, value) pairs; the error names the field.
pub fn target_from_fields(
    fields: &[(String, String)],
) -> std::result::Result<Target, (String, String)> {
    for (k, v) in fields {
        if v.len() > MAX_FIELD_BYTES {
            return Err((
                k.clone(),
                format!(
                    "{} bytes is longer than the {MAX_FIELD_BYTES}-byte limit",
                    v.len()
                ),
            ));
        }
    }
    let name =
        text(fields, "name").ok_or(("name".to_string(), "is missing or empty".to_string()))?;
    let ra_t = text(fields, "ra").ok_or(("ra".to_string(), "is missing".to_string()))?;
    let dec_t = text(fields, "dec").ok_or(("dec".to_string(), "is missing".to_string()))?;
    let ra = parse_ra_deg(ra_t).map_err(|e| ("ra".to_string(), e.to_string()))?;
    let dec = parse_dec_deg(dec_t).map_err(|e| ("dec".to_string(), e.to_string()))?;
    let kind_t = text(fields, "kind").unwrap_or("plain");
    let kind = Kind::parse(kind_t).ok_or((
        "kind".to_string(),
        format!(
            "'{}' is not one of parallax, pulsator, transient, plain",
            cut(kind_t)
        ),
    ))?;
    let mut t = Target::plain(name, ra, dec);
    t.kind = kind;
    t.parallax_mas = num(fields, "parallax_mas")?;
    t.pm_ra_masyr = num(fields, "pm_ra_masyr")?.unwrap_or(0.0);
    t.pm_dec_masyr = num(fields, "pm_dec_masyr")?.unwrap_or(0.0);
    t.epoch_yr = num(fields, "epoch_yr")?.unwrap_or(2000.0);
    t.mag = num(fields, "mag")?;
    t.period_d = num(fields, "period_d")?;
    t.epoch_max_bjd = num(fields, "epoch_max_bjd")?;
    t.period_err_d = num(fields, "period_err_d")?;
    t.amplitude_mag = num(fields, "amplitude_mag")?;
    t.mean_mag = num(fields, "mean_mag")?;
    t.peak_mag = num(fields, "peak_mag")?;
    t.mag_now = num(fields, "mag_now")?;
    t.redshift = num(fields, "redshift")?;
    t.extinction_mag = num(fields, "extinction_mag")?.unwrap_or(0.0);
    t.goal_pct = num(fields, "goal_pct")?;
    t.priority = num(fields, "priority")?.unwrap_or(1.0);
    t.notes = text(fields, "notes").unwrap_or("").to_string();
    if let Some(b) = text(fields, "band") {
        let up = b.to_ascii_uppercase();
        if !BANDS.contains(&up.as_str()) {
            return Err((
                "band".into(),
                format!("'{}' is not one of U, B, V, R, I", cut(b)),
            ));
        }
        t.band = up;
    }
    if let Some(d) = text(fields, "discovered") {
        t.discovered =
            Some(parse_instant(d).map_err(|e| ("discovered".to_string(), e.to_string()))?);
    }
    let bad = |f: &str, why: &str| Err((f.to_string(), why.to_string()));
    if !(1900.0..=2100.0).contains(&t.epoch_yr) {
        return bad("epoch_yr", "must be a Julian year between 1900 and 2100");
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

/// Parse CSV text (header row first).
pub fn parse_csv(text: &str, file: &Path) -> Loaded {
    let mut out = Loaded::default();
    let mut rdr = csv::ReaderBuilder::new()
        .flexible(true)
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let headers: Vec<String> = match rdr.headers() {
        Ok(h) => h.iter().map(|s| s.trim().to_ascii_lowercase()).collect(),
        Err(e) => {
            out.problems.push(RungError::InFile {
                loc: loc(file, 1, ""),
                msg: format!("unreadable header: {e}"),
            });
            return out;
        }
    };
    for need in ["name", "ra", "dec"] {
        if !headers.iter().any(|h| h == need) {
            out.problems.push(RungError::InFile {
                loc: loc(file, 1, need),
                msg: format!("the header has no '{need}' column (required: name, ra, dec)"),
            });
            return out;
        }
    }
    let mut seen = std::collections::HashSet::new();
    for rec in rdr.records() {
        let rec = match rec {
            Ok(r) => r,
            Err(e) => {
                let line = e.position().map(|p| p.line() as usize).unwrap_or(0);
                out.problems.push(RungError::InFile {
                    loc: loc(file, line, ""),
                    msg: format!("unreadable row: {e}"),
                });
                continue;
            }
        };
        let line = rec.position().map(|p| p.line() as usize).unwrap_or(0);
        if rec.len() != headers.len() {
            out.problems.push(RungError::InFile {
                loc: loc(file, line, ""),
                msg: format!(
                    "row has {} fields but the header has {}",
                    rec.len(),
                    headers.len()
                ),
            });
            continue;
        }
        let fields: Vec<(String, String)> = headers
            .iter()
            .cloned()
            .zip(rec.iter().map(|s| s.to_string()))
            .collect();
        push_target(&mut out, &mut seen, fields, file, line);
    }
    out
}

fn push_target(
    out: &mut Loaded,
    seen: &mut std::collections::HashSet<String>,
    fields: Vec<(String, String)>,
    file: &Path,
    line: usize,
) {
    match target_from_fields(&fields) {
        Ok(t) => {
            if !seen.insert(t.name.clone()) {
                out.problems.push(RungError::InFile {
                    loc: loc(file, line, "name"),
                    msg: format!("'{}' is already used by an earlier row", cut(&t.name)),
                });
            } else {
                out.targets.push(t);
            }
        }
        Err((field, msg)) => out.problems.push(RungError::InFile {
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
                .map(|s| text[..s.start.min(text.len())].lines().count().max(1))
                .unwrap_or(1);
            out.problems.push(RungError::InFile {
                loc: loc(file, line, ""),
                msg: format!("not valid TOML: {}", e.message()),
            });
            return out;
        }
    };
    // Lines of the [[target]] headers, to place errors.
    let header_lines: Vec<usize> = text
        .lines()
        .enumerate()
        .filter(|(_, l)| l.trim_start().starts_with("[[target]]"))
        .map(|(i, _)| i + 1)
        .collect();
    let Some(list) = doc.get("target").and_then(|v| v.as_array()) else {
        out.problems.push(RungError::InFile {
            loc: loc(file, 1, "target"),
            msg: "no [[target]] tables found".into(),
        });
        return out;
    };
    let mut seen = std::collections::HashSet::new();
    for (i, item) in list.iter().enumerate() {
        let line = header_lines.get(i).copied().unwrap_or(0);
        let Some(tab) = item.as_table() else {
            out.problems.push(RungError::InFile {
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
            out.problems.push(RungError::InFile {
                loc: loc(file, line, &k),
                msg: "must be a single value".into(),
            });
            continue;
        }
        push_target(&mut out, &mut seen, fields, file, line);
    }
    out
}

/// Unknown column names in a CSV header (reported as warnings by the command line).
pub fn unknown_columns(headers: &[String]) -> Vec<String> {
    headers
        .iter()
        .filter(|h| !KNOWN.contains(&h.as_str()))
        .cloned()
        .collect()
}

/// Read a targets file (by extension: `.toml`, else CSV).
pub fn load(path: &Path) -> Result<Loaded> {
    let meta = std::fs::metadata(path).map_err(|e| RungError::io(path, e))?;
    if meta.is_dir() {
        return Err(RungError::invalid(
            "targets file",
            format!("{} is a folder", path.display()),
        ));
    }
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
    let is_toml = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("toml"));
    Ok(if is_toml {
        parse_toml(&text, path)
    } else {
        parse_csv(&text, path)
    })
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
