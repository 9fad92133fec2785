//! Observing sites: where the telescope stands and what its air is like.

use crate::error::{Result, RungError};
use chrono_tz::Tz;
use serde::{Deserialize, Serialize};

/// One point of a site's horizon mask: below `alt_deg` at `az_deg` the sky is hidden.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct HorizonPoint {
    /// Azimuth, degrees, north 0, east 90.
    pub az_deg: f64,
    /// Lowest usable altitude at that azimuth, degrees.
    pub alt_deg: f64,
}

/// Default Sun-avoidance angle while the Sun is up, degrees (DESIGN.md, safety).
pub const DEFAULT_SUN_AVOID_DEG: f64 = 45.0;

/// An observing site.
#[derive(Debug, Clone, PartialEq)]
pub struct Site {
    /// Name, as in the catalogue (or "inline" for coordinates given on the command line).
    pub name: String,
    /// Geodetic latitude (WGS84), degrees, north positive.
    pub lat_deg: f64,
    /// Longitude, degrees, east positive.
    pub lon_deg: f64,
    /// Height above the ellipsoid, metres.
    pub elev_m: f64,
    /// IANA time zone of the site.
    pub timezone: Tz,
    /// Ambient pressure, hPa; `None` means the standard atmosphere at `elev_m`.
    pub pressure_hpa: Option<f64>,
    /// Ambient temperature, °C.
    pub temperature_c: f64,
    /// Relative humidity, 0–1.
    pub humidity: f64,
    /// Horizon mask (azimuth-sorted); empty means a flat horizon.
    pub horizon: Vec<HorizonPoint>,
    /// Sun-avoidance angle (degrees) while the Sun is up.
    pub sun_avoid_deg: f64,
    /// Weather statistics and the proposal calendar (the budget's).
    pub climate: Climate,
}

/// A semester of a site's proposal calendar: its name and the month it starts.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SemesterStart {
    /// Name appended to the year of its start ("A" → "2027A").
    pub name: String,
    /// First month (1–12).
    pub start_month: u32,
}

/// A site's weather statistics and proposal calendar.
#[derive(Debug, Clone, PartialEq)]
pub struct Climate {
    /// Fraction of nights clear enough for the programme, by month (January
    /// first), when the site gives it; else the budget's documented default.
    pub clear_fraction: Option<[f64; 12]>,
    /// Where the clear fractions come from, in words.
    pub clear_source: Option<String>,
    /// Semesters in order of their first month (at least one).
    pub semesters: Vec<SemesterStart>,
}

impl Default for Climate {
    /// No climatology; semesters A (February–July) and B (August–January),
    /// common practice at many observatories.
    fn default() -> Self {
        Climate {
            clear_fraction: None,
            clear_source: None,
            semesters: vec![
                SemesterStart {
                    name: "A".into(),
                    start_month: 2,
                },
                SemesterStart {
                    name: "B".into(),
                    start_month: 8,
                },
            ],
        }
    }
}

impl Climate {
    /// The semester that holds a date: its label (year of its first month and
    /// its name, "2026B"), its first day and its last day.
    pub fn semester_of(
        &self,
        d: chrono::NaiveDate,
    ) -> (String, chrono::NaiveDate, chrono::NaiveDate) {
        use chrono::{Datelike, NaiveDate};
        let m = d.month();
        let n = self.semesters.len();
        let (i, year) = match self.semesters.iter().rposition(|s| s.start_month <= m) {
            Some(i) => (i, d.year()),
            None => (n - 1, d.year() - 1),
        };
        let s = &self.semesters[i];
        let start = NaiveDate::from_ymd_opt(year, s.start_month, 1).unwrap_or(d);
        let (ny, nm) = if i + 1 < n {
            (year, self.semesters[i + 1].start_month)
        } else {
            (year + 1, self.semesters[0].start_month)
        };
        let end = NaiveDate::from_ymd_opt(ny, nm, 1)
            .and_then(|x| x.pred_opt())
            .unwrap_or(d);
        (format!("{year}{}", s.name), start, end)
    }

    /// Check the clear fractions (each in (0, 1]) and the semesters (one to
    /// twelve, distinct months 1–12, names of 1–8 letters or digits); the
    /// semesters are put in order of their first month.
    pub fn validated(mut self) -> Result<Self> {
        if let Some(f) = &self.clear_fraction {
            for (m, v) in f.iter().enumerate() {
                if !v.is_finite() || *v <= 0.0 || *v > 1.0 {
                    return Err(RungError::invalid(
                        "clear_fraction",
                        format!(
                            "{v} for month {} is not a fraction of nights in (0, 1]",
                            m + 1
                        ),
                    ));
                }
            }
        }
        if self.semesters.is_empty() || self.semesters.len() > 12 {
            return Err(RungError::invalid(
                "semesters",
                format!(
                    "{} semesters: give one to twelve, each with name and start_month",
                    self.semesters.len()
                ),
            ));
        }
        self.semesters.sort_by_key(|s| s.start_month);
        for (i, s) in self.semesters.iter().enumerate() {
            if !(1..=12).contains(&s.start_month) {
                return Err(RungError::invalid(
                    "semesters",
                    format!(
                        "start_month {} of '{}' is not a month 1-12",
                        s.start_month, s.name
                    ),
                ));
            }
            if i > 0 && self.semesters[i - 1].start_month == s.start_month {
                return Err(RungError::invalid(
                    "semesters",
                    format!("two semesters start in month {}", s.start_month),
                ));
            }
            if s.name.is_empty()
                || s.name.chars().count() > 8
                || !s.name.chars().all(|c| c.is_alphanumeric())
            {
                return Err(RungError::invalid(
                    "semesters",
                    format!(
                        "name '{}' must be 1-8 letters or digits",
                        s.name.escape_default()
                    ),
                ));
            }
        }
        Ok(self)
    }
}

/// Standard-atmosphere pressure at height `elev_m` (hPa): the ICAO/US 1976
/// troposphere, p = 1013.25 (1 − 2.25577·10⁻⁵ h)^5.25588 (common practice).
pub fn standard_pressure_hpa(elev_m: f64) -> f64 {
    1013.25 * (1.0 - 2.25577e-5 * elev_m).max(0.0).powf(5.25588)
}

impl Site {
    /// A site with checked values. Latitude must be within ±90° and not at a
    /// pole exactly (hour angle and azimuth are undefined there), longitude within
    /// ±360° (normalised to ±180°), elevation from −500 m to 6000 m.
    pub fn new(name: &str, lat_deg: f64, lon_deg: f64, elev_m: f64, timezone: Tz) -> Result<Self> {
        let s = Site {
            name: name.to_string(),
            lat_deg,
            lon_deg,
            elev_m,
            timezone,
            pressure_hpa: None,
            temperature_c: 10.0,
            humidity: 0.5,
            horizon: Vec::new(),
            sun_avoid_deg: DEFAULT_SUN_AVOID_DEG,
            climate: Climate::default(),
        };
        s.validated()
    }

    /// Check every field; normalise the longitude and sort the horizon mask.
    pub fn validated(mut self) -> Result<Self> {
        if !self.lat_deg.is_finite() || self.lat_deg.abs() > 90.0 {
            return Err(RungError::invalid(
                "latitude",
                format!("{} is not within -90..+90 degrees", self.lat_deg),
            ));
        }
        if self.lat_deg.abs() > 89.99 {
            return Err(RungError::invalid(
                "latitude",
                format!(
                    "{} is at a pole, where azimuth and hour angle are undefined; use |lat| <= 89.99",
                    self.lat_deg
                ),
            ));
        }
        if !self.lon_deg.is_finite() || self.lon_deg.abs() > 360.0 {
            return Err(RungError::invalid(
                "longitude",
                format!(
                    "{} is not within -360..+360 degrees (east positive)",
                    self.lon_deg
                ),
            ));
        }
        self.lon_deg = ((self.lon_deg + 180.0).rem_euclid(360.0)) - 180.0;
        if !self.elev_m.is_finite() || !(-500.0..=6000.0).contains(&self.elev_m) {
            return Err(RungError::invalid(
                "elevation",
                format!("{} m is not within -500..6000 m", self.elev_m),
            ));
        }
        if let Some(p) = self.pressure_hpa
            && (!p.is_finite() || !(0.0..=1100.0).contains(&p))
        {
            return Err(RungError::invalid(
                "pressure_hpa",
                format!("{p} is not within 0..1100 hPa"),
            ));
        }
        if !self.temperature_c.is_finite() || !(-80.0..=60.0).contains(&self.temperature_c) {
            return Err(RungError::invalid(
                "temperature_c",
                format!("{} is not within -80..60 °C", self.temperature_c),
            ));
        }
        if !self.humidity.is_finite() || !(0.0..=1.0).contains(&self.humidity) {
            return Err(RungError::invalid(
                "humidity",
                format!("{} is not within 0..1", self.humidity),
            ));
        }
        if !self.sun_avoid_deg.is_finite() || !(0.0..=180.0).contains(&self.sun_avoid_deg) {
            return Err(RungError::invalid(
                "sun_avoid_deg",
                format!("{} is not within 0..180 degrees", self.sun_avoid_deg),
            ));
        }
        for h in &self.horizon {
            if !h.az_deg.is_finite() || !h.alt_deg.is_finite() || h.alt_deg.abs() > 90.0 {
                return Err(RungError::invalid(
                    "horizon",
                    format!("point az {} alt {} is not a direction", h.az_deg, h.alt_deg),
                ));
            }
        }
        for h in &mut self.horizon {
            h.az_deg = h.az_deg.rem_euclid(360.0);
        }
        self.horizon.sort_by(|a, b| {
            a.az_deg
                .partial_cmp(&b.az_deg)
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        Ok(self)
    }

    /// Pressure used for refraction, hPa (given, or the standard atmosphere).
    pub fn pressure_hpa(&self) -> f64 {
        self.pressure_hpa
            .unwrap_or_else(|| standard_pressure_hpa(self.elev_m))
    }

    /// Latitude in radians.
    pub fn lat_rad(&self) -> f64 {
        self.lat_deg.to_radians()
    }

    /// Longitude (east positive) in radians.
    pub fn lon_rad(&self) -> f64 {
        self.lon_deg.to_radians()
    }

    /// Horizon-mask altitude (degrees) at an azimuth, linear between points and
    /// wrapping through north; 0 for a flat horizon.
    pub fn horizon_alt_deg(&self, az_deg: f64) -> f64 {
        let n = self.horizon.len();
        if n == 0 {
            return 0.0;
        }
        if n == 1 {
            return self.horizon[0].alt_deg;
        }
        let az = az_deg.rem_euclid(360.0);
        let idx = self.horizon.partition_point(|p| p.az_deg <= az);
        let (a, b) = if idx == 0 || idx == n {
            (self.horizon[n - 1], self.horizon[0])
        } else {
            (self.horizon[idx - 1], self.horizon[idx])
        };
        let span = (b.az_deg - a.az_deg).rem_euclid(360.0);
        if span == 0.0 {
            return a.alt_deg;
        }
        let off = (az - a.az_deg).rem_euclid(360.0);
        a.alt_deg + (b.alt_deg - a.alt_deg) * off / span
    }

    /// Hours the zone's clock runs ahead of the mean solar time at the site's
    /// longitude (UTC offset − longitude/15°), wrapped to −12..12; of the
    /// zone's offsets in January and July 2026 (summer time), the one nearer
    /// the longitude.
    pub fn zone_ahead_of_longitude_h(&self) -> f64 {
        use chrono::{Offset, TimeZone};
        let solar_h = self.lon_deg / 15.0;
        [(1u32, 15u32), (7, 15)]
            .iter()
            .filter_map(|(m, d)| {
                let at = chrono::NaiveDate::from_ymd_opt(2026, *m, *d)?.and_hms_opt(12, 0, 0)?;
                let off_s = self
                    .timezone
                    .offset_from_utc_datetime(&at)
                    .fix()
                    .local_minus_utc();
                Some((off_s as f64 / 3600.0 - solar_h + 12.0).rem_euclid(24.0) - 12.0)
            })
            .min_by(|a, b| a.abs().total_cmp(&b.abs()))
            .unwrap_or(0.0)
    }

    /// Whether the zone contradicts the longitude by more than
    /// [`crate::bounds::ZONE_FROM_LONGITUDE_MAX_H`]. Such a site's nights run
    /// from mean solar noon to mean solar noon (see `astro::night::local_noon`),
    /// and [`Self::zone_warning`] says so.
    pub fn zone_contradicts_longitude(&self) -> bool {
        self.zone_ahead_of_longitude_h().abs() > crate::bounds::ZONE_FROM_LONGITUDE_MAX_H
    }

    /// The warning for a zone that contradicts the longitude, or `None`.
    pub fn zone_warning(&self) -> Option<String> {
        if !self.zone_contradicts_longitude() {
            return None;
        }
        let ahead = self.zone_ahead_of_longitude_h();
        let solar_min = (self.lon_deg / 15.0 * 60.0).round() as i64;
        Some(format!(
            "site {}: the zone {} runs {:.1} h {} the mean solar time of longitude {}° (UTC{}{:02}:{:02}); its nights are taken from mean solar noon to noon, so that dusk and dawn fall in one night, and times are shown in {} as given",
            self.name,
            self.timezone.name(),
            ahead.abs(),
            if ahead > 0.0 { "ahead of" } else { "behind" },
            self.lon_deg,
            if solar_min < 0 { '-' } else { '+' },
            solar_min.abs() / 60,
            solar_min.abs() % 60,
            self.timezone.name()
        ))
    }

    /// Distance from the Earth's spin axis and north of the equator (km), for TDB.
    pub fn spin_axis_uv_km(&self) -> (f64, f64) {
        match sofars::coords::gd2gc(1, self.lon_rad(), self.lat_rad(), self.elev_m) {
            Ok(xyz) => (
                (xyz[0] * xyz[0] + xyz[1] * xyz[1]).sqrt() / 1000.0,
                xyz[2] / 1000.0,
            ),
            Err(_) => (0.0, 0.0),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn standard_atmosphere() {
        // US Standard Atmosphere 1976: 1013.25 hPa at sea level, ≈ 795 hPa at 2000 m,
        // ≈ 616 hPa at 4000 m (tabulated values, quoted from memory).
        assert!((standard_pressure_hpa(0.0) - 1013.25).abs() < 1e-9);
        assert!((standard_pressure_hpa(2000.0) - 795.0).abs() < 1.5);
        assert!((standard_pressure_hpa(4000.0) - 616.4).abs() < 1.5);
    }

    #[test]
    fn bad_sites() {
        let tz: Tz = "UTC".parse().unwrap();
        assert!(Site::new("x", 95.0, 0.0, 0.0, tz).is_err());
        assert!(Site::new("x", 90.0, 0.0, 0.0, tz).is_err());
        assert!(Site::new("x", 10.0, f64::NAN, 0.0, tz).is_err());
        assert!(Site::new("x", 10.0, 0.0, 9000.0, tz).is_err());
        let s = Site::new("x", 10.0, 270.0, 0.0, tz).unwrap();
        assert!((s.lon_deg + 90.0).abs() < 1e-12);
    }

    #[test]
    fn horizon_mask_interpolates_and_wraps() {
        let tz: Tz = "UTC".parse().unwrap();
        let mut s = Site::new("x", 10.0, 0.0, 0.0, tz).unwrap();
        s.horizon = vec![
            HorizonPoint {
                az_deg: 90.0,
                alt_deg: 10.0,
            },
            HorizonPoint {
                az_deg: 270.0,
                alt_deg: 20.0,
            },
        ];
        let s = s.validated().unwrap();
        assert!((s.horizon_alt_deg(180.0) - 15.0).abs() < 1e-9);
        assert!((s.horizon_alt_deg(0.0) - 15.0).abs() < 1e-9);
        assert!((s.horizon_alt_deg(90.0) - 10.0).abs() < 1e-9);
    }
}
