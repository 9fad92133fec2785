//! The site catalogue: `config/sites.toml` (built in), the user's own
//! `sites.toml` in the user config folder, and inline `LAT,LON,ELEV_M[,ZONE]`.

use crate::astro::site::{Climate, DEFAULT_SUN_AVOID_DEG, HorizonPoint, SemesterStart, Site};
use crate::config::{self, Layer, Named};
use crate::error::{Location, Result, RungError};
use crate::io::atomic::save_with_backup;
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// The built-in catalogue (config/sites.toml), compiled in so rung works anywhere.
pub const BUILTIN_SITES: &str = config::SITES.builtin;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SiteRow {
    name: String,
    lat_deg: f64,
    lon_deg: f64,
    elev_m: f64,
    timezone: String,
    pressure_hpa: Option<f64>,
    temperature_c: Option<f64>,
    humidity: Option<f64>,
    sun_avoid_deg: Option<f64>,
    horizon: Option<Vec<[f64; 2]>>,
    description: Option<String>,
    clear_fraction: Option<[f64; 12]>,
    clear_source: Option<String>,
    semesters: Option<Vec<SemesterStart>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SiteFile {
    #[serde(default)]
    site: Vec<SiteRow>,
}

/// The user's config folder for rung (`$RUNG_CONFIG_DIR` overrides it).
pub use crate::config::user_config_dir;

impl Named for Site {
    fn name(&self) -> &str {
        &self.name
    }
}

/// Parse a sites TOML text. `file` names it in errors (file, line and field;
/// a name given twice in one file is refused).
pub fn parse_sites(text: &str, file: &Path) -> Result<Vec<Site>> {
    let layer = Layer::new(text, file);
    let f: SiteFile = config::parse(&layer)?;
    config::entries(&layer, "site", f.site, site_from_row)
}

fn site_from_row(r: SiteRow) -> Result<Site> {
    let tz = r.timezone.parse::<chrono_tz::Tz>().map_err(|_| {
        RungError::invalid(
            "timezone",
            format!("'{}' is not an IANA time zone", r.timezone),
        )
    })?;
    let _ = r.description;
    let site = Site {
        name: r.name.clone(),
        lat_deg: r.lat_deg,
        lon_deg: r.lon_deg,
        elev_m: r.elev_m,
        timezone: tz,
        pressure_hpa: r.pressure_hpa,
        temperature_c: r.temperature_c.unwrap_or(10.0),
        humidity: r.humidity.unwrap_or(0.5),
        horizon: r
            .horizon
            .unwrap_or_default()
            .into_iter()
            .map(|[az_deg, alt_deg]| HorizonPoint { az_deg, alt_deg })
            .collect(),
        sun_avoid_deg: r.sun_avoid_deg.unwrap_or(DEFAULT_SUN_AVOID_DEG),
        climate: Climate {
            clear_fraction: r.clear_fraction,
            clear_source: r.clear_source,
            semesters: r.semesters.unwrap_or_else(|| Climate::default().semesters),
        }
        .validated()?,
    };
    site.validated().map_err(|e| match e {
        // Name the key as it is written in the file.
        RungError::Invalid { what, why } => RungError::Invalid {
            what: match what.as_str() {
                "latitude" => "lat_deg",
                "longitude" => "lon_deg",
                "elevation" => "elev_m",
                w => w,
            }
            .to_string(),
            why,
        },
        other => other,
    })
}

/// Every known site: built-in (`config/sites.toml`) with the user's
/// `sites.toml` merged over it by name ([`config::merge_by_name`]).
pub fn catalogue() -> Result<Vec<Site>> {
    let mut all = Vec::new();
    for l in config::SITES.layers(None)? {
        config::merge_by_name(&mut all, parse_sites(&l.text, &l.file)?);
    }
    Ok(all)
}

/// The user's own site catalogue, `sites.toml` in [`user_config_dir`].
pub fn user_sites_path() -> Option<PathBuf> {
    user_config_dir().map(|d| d.join("sites.toml"))
}

/// One `[[site]]` table in the catalogue's TOML layout.
pub fn site_toml(site: &Site) -> String {
    let q = |s: &str| toml::Value::String(s.to_string()).to_string();
    let mut t = format!(
        "[[site]]\nname = {}\nlat_deg = {:?}\nlon_deg = {:?}\nelev_m = {:?}\ntimezone = {}\n",
        q(&site.name),
        site.lat_deg,
        site.lon_deg,
        site.elev_m,
        q(site.timezone.name())
    );
    if let Some(p) = site.pressure_hpa {
        t.push_str(&format!("pressure_hpa = {p:?}\n"));
    }
    t.push_str(&format!(
        "temperature_c = {:?}\nhumidity = {:?}\nsun_avoid_deg = {:?}\n",
        site.temperature_c, site.humidity, site.sun_avoid_deg
    ));
    if !site.horizon.is_empty() {
        let pts: Vec<String> = site
            .horizon
            .iter()
            .map(|h| format!("[{:?}, {:?}]", h.az_deg, h.alt_deg))
            .collect();
        t.push_str(&format!("horizon = [{}]\n", pts.join(", ")));
    }
    if let Some(f) = &site.climate.clear_fraction {
        let v: Vec<String> = f.iter().map(|x| format!("{x:?}")).collect();
        t.push_str(&format!("clear_fraction = [{}]\n", v.join(", ")));
    }
    if let Some(src) = &site.climate.clear_source {
        t.push_str(&format!("clear_source = {}\n", q(src)));
    }
    if site.climate.semesters != Climate::default().semesters {
        let v: Vec<String> = site
            .climate
            .semesters
            .iter()
            .map(|s| {
                format!(
                    "{{ name = {}, start_month = {} }}",
                    q(&s.name),
                    s.start_month
                )
            })
            .collect();
        t.push_str(&format!("semesters = [{}]\n", v.join(", ")));
    }
    t
}

/// Add `site` to the sites catalogue file at `path` (created when missing),
/// keeping everything already written there (comments included) and the
/// previous version in `path.bak` ([`save_with_backup`]).
///
/// A file that does not parse is never overwritten: the error names the file
/// and the line where it is broken, and the file is left as it is for the
/// user to mend. A name already in the file is refused too.
pub fn add_site_to_file(path: &Path, site: &Site) -> Result<()> {
    let old = match std::fs::read(path) {
        Ok(b) => String::from_utf8(b).map_err(|e| RungError::InFile {
            loc: Location {
                file: Some(path.to_path_buf()),
                line: Some(line_of_bytes(e.as_bytes(), e.utf8_error().valid_up_to())),
                field: None,
            },
            msg: "is not UTF-8 text; left unchanged".into(),
        })?,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => String::new(),
        Err(e) => return Err(RungError::io(path, e)),
    };
    let existing = parse_sites(&old, path).map_err(|e| match e {
        RungError::InFile { loc, msg } => RungError::InFile {
            loc,
            msg: format!("{msg} (the file is left unchanged; mend it, then add the site again)"),
        },
        other => other,
    })?;
    if existing
        .iter()
        .any(|s| s.name.eq_ignore_ascii_case(&site.name))
    {
        return Err(RungError::invalid(
            "site",
            format!(
                "{} already has a site named '{}'; edit that entry instead",
                path.display(),
                site.name
            ),
        ));
    }
    let mut text = old;
    if !text.is_empty() && !text.ends_with('\n') {
        text.push('\n');
    }
    if !text.is_empty() {
        text.push('\n');
    }
    text.push_str(&site_toml(site));
    // What is written must read back as the same catalogue plus this site.
    let back = parse_sites(&text, path)?;
    if back.len() != existing.len() + 1 {
        return Err(RungError::invalid(
            "site",
            "the new catalogue text does not read back; nothing was written",
        ));
    }
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(|e| RungError::io(dir, e))?;
    }
    save_with_backup(path, text.as_bytes())
}

fn line_of_bytes(b: &[u8], upto: usize) -> usize {
    1 + b[..upto.min(b.len())]
        .iter()
        .filter(|c| **c == b'\n')
        .count()
}

/// A zone for an inline site without one: the whole-hour `Etc/GMT±N` zone nearest its longitude.
pub fn zone_from_longitude(lon_deg: f64) -> chrono_tz::Tz {
    let h = (lon_deg / 15.0).round() as i32;
    let name = match h {
        0 => "Etc/GMT".to_string(),
        h if h > 0 => format!("Etc/GMT-{}", h.min(12)),
        h => format!("Etc/GMT+{}", (-h).min(12)),
    };
    name.parse().unwrap_or(chrono_tz::UTC)
}

/// Resolve `--site`: a catalogue name (case-insensitive) or `LAT,LON,ELEV_M[,ZONE]`.
pub fn resolve(spec: &str) -> Result<Site> {
    let parts: Vec<&str> = spec.split(',').map(|s| s.trim()).collect();
    if parts.len() >= 3 && parts[0].parse::<f64>().is_ok() {
        let num = |i: usize, what: &str| -> Result<f64> {
            parts[i]
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| RungError::parse(what, parts[i], "expected a number"))
        };
        let lat = num(0, "latitude")?;
        let lon = num(1, "longitude")?;
        let elev = num(2, "elevation")?;
        let tz = match parts.get(3) {
            Some(z) => z.parse::<chrono_tz::Tz>().map_err(|_| {
                RungError::parse(
                    "time zone",
                    z,
                    "expected an IANA zone such as America/Santiago",
                )
            })?,
            None => zone_from_longitude(lon),
        };
        if parts.len() > 4 {
            return Err(RungError::parse(
                "site",
                spec,
                "expected LAT,LON,ELEV_M[,ZONE]",
            ));
        }
        return Site::new("inline", lat, lon, elev, tz);
    }
    let all = catalogue()?;
    config::find(
        &all,
        "site",
        spec,
        "; or give LAT,LON,ELEV_M (degrees, east-positive longitude, metres)",
    )
    .cloned()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_catalogue_parses_with_both_hemispheres() {
        let all = parse_sites(BUILTIN_SITES, Path::new("config/sites.toml")).unwrap();
        assert!(all.len() >= 2);
        assert!(all.iter().any(|s| s.lat_deg < 0.0));
        assert!(all.iter().any(|s| s.lat_deg > 0.0));
    }

    #[test]
    fn inline_and_errors() {
        let s = resolve("-30.5,-70.8,2400").unwrap();
        assert_eq!(s.timezone.name(), "Etc/GMT+5");
        assert!(
            resolve("95,0,0")
                .unwrap_err()
                .to_string()
                .contains("latitude")
        );
        assert!(
            resolve("no-such-site")
                .unwrap_err()
                .to_string()
                .contains("unknown site")
        );
        assert!(resolve("10,20,30,Not/AZone").is_err());
    }

    #[test]
    fn bad_site_file_names_line_and_field() {
        let t = "[[site]]\nname = \"a\"\nlat_deg = 10\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\n\n[[site]]\nname = \"b\"\nlat_deg = 95\nlon_deg = 10\nelev_m = 0\ntimezone = \"UTC\"\n";
        let e = parse_sites(t, Path::new("s.toml")).unwrap_err().to_string();
        assert!(
            e.contains("s.toml") && e.contains("line 10") && e.contains("field 'lat_deg'"),
            "{e}"
        );
    }
}
