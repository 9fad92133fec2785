//! Time scales and instants.
//!
//! One internal representation: an instant is a two-part Julian date in UTC,
//! as SOFA keeps it (`utc1` the whole day at 0h, `utc2` the fraction, on a
//! leap-second day the fraction is scaled to 86 401 s exactly as SOFA does).
//! TAI, TT, TDB and UT1 come from sofars. DUT1 (UT1 − UTC) is taken as 0:
//! |DUT1| < 0.9 s by the definition of UTC, which moves a star by at most
//! 13.5″ in hour angle at the equator; rung's planning needs do not call for
//! IERS bulletins, and this is documented in DEVELOPERS.md.

use crate::error::{Result, RungError};
use chrono::{DateTime, Datelike, NaiveDate, NaiveDateTime, TimeZone, Timelike, Utc};
use sofars::ts;

/// First day of the valid span (UTC begins in 1960; SOFA `dat` starts there).
pub const VALID_FROM: &str = "1960-01-01";
/// Last day of the valid span (SOFA `epv00` is fitted to 1900–2100).
pub const VALID_TO: &str = "2099-12-31";
const VALID_FROM_JD: f64 = 2436934.5; // 1960-01-01 0h
const VALID_TO_JD: f64 = 2488069.5; // 2100-01-01 0h

/// Seconds per day.
pub const DAY_S: f64 = 86_400.0;
/// Julian date of the Unix epoch 1970-01-01T00:00:00 UTC.
pub const UNIX_EPOCH_JD: f64 = 2_440_587.5;

/// DUT1 = UT1 − UTC used throughout (seconds). See the module note.
pub const DUT1_S: f64 = 0.0;

/// An instant, held as a two-part UTC Julian date (SOFA convention).
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Instant {
    /// Whole-day part: the Julian date of 0h UTC of the day.
    pub utc1: f64,
    /// Fraction of the day, in [0, 1).
    pub utc2: f64,
}

fn check_span(jd: f64, text: impl FnOnce() -> String) -> Result<()> {
    if !(VALID_FROM_JD..VALID_TO_JD).contains(&jd) || !jd.is_finite() {
        return Err(RungError::OutOfSpan {
            when: text(),
            from: VALID_FROM,
            to: VALID_TO,
        });
    }
    Ok(())
}

impl Instant {
    /// Build from a calendar date and UTC time of day (seconds may reach 60.x on a
    /// leap-second day). Checks rung's valid span.
    pub fn from_utc_calendar(y: i32, mo: u32, d: u32, h: u32, mi: u32, sec: f64) -> Result<Self> {
        let (a, b) =
            ts::dtf2d("UTC", y, mo as i32, d as i32, h as i32, mi as i32, sec).map_err(|_| {
                RungError::invalid(
                    "time",
                    format!("{y:04}-{mo:02}-{d:02} {h:02}:{mi:02}:{sec:06.3} is not a UTC time"),
                )
            })?;
        // Normalise to utc1 = 0h of the day, utc2 = fraction.
        let whole = (a + b - 0.5).floor() + 0.5;
        let inst = Instant {
            utc1: whole,
            utc2: (a - whole) + b,
        };
        check_span(inst.utc1, || format!("{y:04}-{mo:02}-{d:02}"))?;
        Ok(inst)
    }

    /// From a chrono UTC date-time (a leap second is carried in the nanoseconds).
    pub fn from_datetime(dt: DateTime<Utc>) -> Result<Self> {
        let ns = dt.nanosecond() as f64; // may be >= 1e9 during a leap second
        Self::from_utc_calendar(
            dt.year(),
            dt.month(),
            dt.day(),
            dt.hour(),
            dt.minute(),
            dt.second() as f64 + ns * 1e-9,
        )
    }

    /// From a UTC Julian date (single number); a convenience for tests and fixtures.
    pub fn from_jd_utc(jd: f64) -> Result<Self> {
        check_span(jd, || format!("JD {jd}"))?;
        let whole = (jd - 0.5).floor() + 0.5;
        Ok(Instant {
            utc1: whole,
            utc2: jd - whole,
        })
    }

    /// UTC Julian date as one number (precision about 20 µs; use the parts for more).
    pub fn jd_utc(&self) -> f64 {
        self.utc1 + self.utc2
    }

    /// Modified Julian date (UTC) as one number.
    pub fn mjd_utc(&self) -> f64 {
        (self.utc1 - 2_400_000.5) + self.utc2
    }

    /// The UTC calendar date-time (chrono), a leap second shown as :60 via nanoseconds.
    pub fn to_datetime(&self) -> DateTime<Utc> {
        match ts::d2dtf("UTC", 6, self.utc1, self.utc2) {
            Ok((y, mo, d, [h, mi, s, f])) => {
                let date =
                    NaiveDate::from_ymd_opt(y, mo as u32, d as u32).unwrap_or(NaiveDate::MIN);
                let (s, nano) = if s >= 60 {
                    (59u32, 1_000_000_000u32 + f as u32 * 1000)
                } else {
                    (s as u32, f as u32 * 1000)
                };
                let t = chrono::NaiveTime::from_hms_nano_opt(h as u32, mi as u32, s, nano)
                    .unwrap_or_default();
                Utc.from_utc_datetime(&NaiveDateTime::new(date, t))
            }
            Err(_) => DateTime::<Utc>::MIN_UTC,
        }
    }

    /// ISO 8601 text in UTC, to the second, with `Z`.
    pub fn iso(&self) -> String {
        let r = self.round_to_second();
        r.to_datetime().format("%Y-%m-%dT%H:%M:%SZ").to_string()
    }

    /// The same instant rounded to the nearest whole UTC second.
    pub fn round_to_second(&self) -> Instant {
        let dt = self.to_datetime();
        let extra = dt.nanosecond() % 1_000_000_000;
        let up = extra >= 500_000_000;
        let back = self.add_seconds(-(extra as f64) * 1e-9);
        if up { back.add_seconds(1.0) } else { back }
    }

    /// TAI as a two-part Julian date.
    pub fn tai(&self) -> (f64, f64) {
        ts::utctai(self.utc1, self.utc2).unwrap_or((self.utc1, self.utc2))
    }

    /// TT as a two-part Julian date.
    pub fn tt(&self) -> (f64, f64) {
        let (a, b) = self.tai();
        ts::taitt(a, b).unwrap_or((a, b))
    }

    /// UT1 as a two-part Julian date, with DUT1 = 0 (see module note).
    pub fn ut1(&self) -> (f64, f64) {
        ts::utcut1(self.utc1, self.utc2, DUT1_S).unwrap_or((self.utc1, self.utc2))
    }

    /// TDB as a two-part Julian date, for an observer at geodetic longitude
    /// `lon_rad` whose distance from the Earth's spin axis is `u_km` and north of
    /// the equator `v_km` (SOFA `dtdb`, Fairhead & Bretagnon 1990 series; the
    /// topocentric part is at most ~2 µs, pass zeros for the geocentre).
    pub fn tdb(&self, lon_rad: f64, u_km: f64, v_km: f64) -> (f64, f64) {
        let (t1, t2) = self.tt();
        let (u1, u2) = self.ut1();
        let ut_frac = (u1 - 0.5).fract() + u2;
        let ut_frac = ut_frac - ut_frac.floor();
        let dtr = ts::dtdb(t1, t2, ut_frac, lon_rad, u_km, v_km);
        ts::tttdb(t1, t2, dtr).unwrap_or((t1, t2))
    }

    /// TAI − UTC in seconds at this instant (leap seconds, SOFA `dat`).
    pub fn tai_minus_utc_s(&self) -> f64 {
        let (a, b) = self.tai();
        ((a - self.utc1) + (b - self.utc2)) * DAY_S
    }

    /// The instant `s` SI seconds later (computed through TAI so that leap seconds count).
    pub fn add_seconds(&self, s: f64) -> Instant {
        let (a, b) = self.tai();
        let b2 = b + s / DAY_S;
        match ts::taiutc(a, b2) {
            Ok((u1, u2)) => {
                let whole = (u1 + u2 - 0.5).floor() + 0.5;
                Instant {
                    utc1: whole,
                    utc2: (u1 - whole) + u2,
                }
            }
            Err(_) => Instant {
                utc1: self.utc1,
                utc2: self.utc2 + s / DAY_S,
            },
        }
    }

    /// SI seconds from `earlier` to `self` (through TAI).
    pub fn seconds_since(&self, earlier: &Instant) -> f64 {
        let (a1, b1) = self.tai();
        let (a0, b0) = earlier.tai();
        ((a1 - a0) + (b1 - b0)) * DAY_S
    }

    /// The current instant from the system clock.
    pub fn now() -> Result<Self> {
        Self::from_datetime(Utc::now())
    }

    /// Civil time at a site's IANA zone.
    pub fn local<Z: TimeZone>(&self, tz: &Z) -> DateTime<Z> {
        self.to_datetime().with_timezone(tz)
    }

    /// Julian epoch (TT), e.g. 2026.9 — used for proper motion and parallax fits.
    pub fn julian_epoch_tt(&self) -> f64 {
        let (a, b) = self.tt();
        sofars::cal::epj(a, b)
    }

    /// Build from a chrono date-time in any zone.
    pub fn from_zoned<Z: TimeZone>(dt: &DateTime<Z>) -> Result<Self> {
        Self::from_datetime(dt.with_timezone(&Utc))
    }
}

impl serde::Serialize for Instant {
    /// As ISO 8601 UTC text to the second (`2026-12-01T23:15:00Z`).
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.serialize_str(&self.iso())
    }
}

impl<'de> serde::Deserialize<'de> for Instant {
    /// From ISO 8601 text, as [`parse_instant`] reads it (but not `now`).
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        let s = String::deserialize(d)?;
        if s.trim().eq_ignore_ascii_case("now") {
            return Err(serde::de::Error::custom("'now' is not a stored instant"));
        }
        parse_instant(&s).map_err(serde::de::Error::custom)
    }
}

/// Parse an ISO 8601 instant: `2026-12-01T23:15:00Z`, with an offset
/// (`+02:00`), fractional seconds, a space instead of `T`, or no zone at all
/// (then it is UTC). `now` is the system clock.
pub fn parse_instant(text: &str) -> Result<Instant> {
    let t = text.trim();
    if t.eq_ignore_ascii_case("now") {
        return Instant::now();
    }
    if let Ok(dt) = DateTime::parse_from_rfc3339(t) {
        return Instant::from_datetime(dt.with_timezone(&Utc));
    }
    let with_t = t.replacen(' ', "T", 1);
    if let Ok(dt) = DateTime::parse_from_rfc3339(&with_t) {
        return Instant::from_datetime(dt.with_timezone(&Utc));
    }
    let bare = with_t.trim_end_matches(['Z', 'z']);
    for fmt in ["%Y-%m-%dT%H:%M:%S%.f", "%Y-%m-%dT%H:%M"] {
        if let Ok(n) = NaiveDateTime::parse_from_str(bare, fmt) {
            return Instant::from_datetime(Utc.from_utc_datetime(&n));
        }
    }
    // A leap second written as :60 is not accepted by chrono's parser; take it apart.
    if let Some((date, time)) = bare.split_once('T') {
        let tp: Vec<&str> = time.split(':').collect();
        if tp.len() == 3
            && let (Ok(d), Ok(h), Ok(m), Ok(s)) = (
                NaiveDate::parse_from_str(date, "%Y-%m-%d"),
                tp[0].parse::<u32>(),
                tp[1].parse::<u32>(),
                tp[2].parse::<f64>(),
            )
            && (60.0..61.0).contains(&s)
        {
            return Instant::from_utc_calendar(d.year(), d.month(), d.day(), h, m, s);
        }
    }
    Err(RungError::parse(
        "time",
        text,
        "expected ISO 8601 such as 2026-12-01T23:15:00Z (UTC), 2026-12-01T20:15:00-03:00, or 'now'",
    ))
}

/// Parse a calendar date `YYYY-MM-DD` (the night that begins on that local evening).
pub fn parse_date(text: &str) -> Result<NaiveDate> {
    let d = NaiveDate::parse_from_str(text.trim(), "%Y-%m-%d").map_err(|_| {
        RungError::parse(
            "date",
            text,
            "expected YYYY-MM-DD, a real calendar date such as 2026-12-01",
        )
    })?;
    let jd = sofars::cal::cal2jd(d.year(), d.month() as i32, d.day() as i32)
        .map(|(a, b)| a + b)
        .unwrap_or(0.0);
    check_span(jd, || d.to_string())?;
    check_span(jd + 1.0, || d.to_string())?;
    Ok(d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn leap_second_day_counts_86401_seconds() {
        // 2016-12-31 had a leap second (IERS Bulletin C 52; fact of the trade).
        let a = Instant::from_utc_calendar(2016, 12, 31, 0, 0, 0.0).unwrap();
        let b = Instant::from_utc_calendar(2017, 1, 1, 0, 0, 0.0).unwrap();
        assert!((b.seconds_since(&a) - 86_401.0).abs() < 1e-4);
        assert!((a.tai_minus_utc_s() - 36.0).abs() < 1e-6);
        assert!((b.tai_minus_utc_s() - 37.0).abs() < 1e-6);
        let leap = parse_instant("2016-12-31T23:59:60.5Z").unwrap();
        assert!((b.seconds_since(&leap) - 0.5).abs() < 1e-4);
    }

    #[test]
    fn tt_minus_tai_is_32_184_s() {
        // TT = TAI + 32.184 s by definition (IAU 1991; fact of the trade).
        let t = parse_instant("2026-12-01T00:00:00Z").unwrap();
        let (a, b) = t.tt();
        let (c, d) = t.tai();
        assert!((((a - c) + (b - d)) * DAY_S - 32.184).abs() < 1e-6);
    }

    #[test]
    fn iso_round_trip() {
        for s in [
            "2026-12-01T23:15:07Z",
            "2000-01-01T12:00:00Z",
            "2099-12-31T23:59:59Z",
        ] {
            assert_eq!(parse_instant(s).unwrap().iso(), s);
        }
        assert_eq!(
            parse_instant("2026-12-01 20:15:07-03:00").unwrap().iso(),
            "2026-12-01T23:15:07Z"
        );
    }

    #[test]
    fn bad_times_are_refused() {
        for s in [
            "2026-13-01T00:00:00Z",
            "yesterday",
            "2026-02-30",
            "",
            "1899-01-01T00:00:00Z",
        ] {
            assert!(parse_instant(s).is_err(), "{s}");
        }
        assert!(parse_date("2026-02-30").is_err());
        assert!(parse_date("2100-06-01").is_err());
        assert!(parse_date("1959-12-31").is_err());
    }

    #[test]
    fn add_seconds_crosses_days() {
        let t = parse_instant("2026-12-01T23:59:30Z").unwrap();
        assert_eq!(t.add_seconds(45.0).iso(), "2026-12-02T00:00:15Z");
        assert_eq!(t.add_seconds(-86_400.0).iso(), "2026-11-30T23:59:30Z");
    }
}
