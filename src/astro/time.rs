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
/// UTC Julian date of [`VALID_FROM`] at 0h: the first instant rung accepts.
pub const VALID_FROM_JD: f64 = 2436934.5; // 1960-01-01 0h
/// UTC Julian date of the day after [`VALID_TO`] at 0h: the first instant rung refuses.
pub const VALID_TO_JD: f64 = 2488069.5; // 2100-01-01 0h

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
    if !jd.is_finite() || !(VALID_FROM_JD..VALID_TO_JD).contains(&jd) {
        return Err(RungError::OutOfSpan {
            when: text(),
            from: VALID_FROM,
            to: VALID_TO,
        });
    }
    Ok(())
}

/// Whether the UTC day ends with a positive leap second (TAI − UTC grows by
/// one second at the following midnight, SOFA `dat`).
pub fn has_leap_second(y: i32, mo: u32, d: u32) -> bool {
    let Some(next) = NaiveDate::from_ymd_opt(y, mo, d).and_then(|x| x.succ_opt()) else {
        return false;
    };
    match (
        ts::dat(y, mo as i32, d as i32, 0.0),
        ts::dat(next.year(), next.month() as i32, next.day() as i32, 0.0),
    ) {
        (Ok(a), Ok(b)) => y >= 1972 && (b - a - 1.0).abs() < 1e-9,
        _ => false,
    }
}

/// Refuse a (UTC or BJD-like) Julian date outside rung's valid span
/// [`VALID_FROM`]..=[`VALID_TO`] with [`RungError::OutOfSpan`]; `what` names it
/// in the message (e.g. "epoch_max_bjd 2400000.5").
pub fn check_jd_in_span(jd: f64, what: &str) -> Result<()> {
    check_span(jd, || what.to_string())
}

/// UTC Julian date of 1972-01-01 0h: from then on TAI − UTC is a whole number
/// of seconds that changes only at leap seconds, at 0h of the first of a month.
const LEAP_ERA_JD: f64 = 2_441_317.5;

/// SOFA's leap-second table as rung uses it: (UTC Julian date at 0h of the
/// first day a value holds, TAI − UTC in seconds from then on), from 1972 to
/// the end of rung's valid span, read once from SOFA `dat` (so it is exactly
/// SOFA's table, whatever sofars version is built in). Converting between
/// UTC, TAI, TT and UT1 is then a lookup in this short list and arithmetic,
/// instead of calendar conversions for every instant.
pub fn leap_seconds() -> &'static [(f64, f64)] {
    use std::sync::OnceLock;
    static TABLE: OnceLock<Vec<(f64, f64)>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let mut out: Vec<(f64, f64)> = Vec::new();
        for y in 1972..=2100 {
            for m in 1..=12 {
                let (Ok(dat), Ok((a, b))) = (ts::dat(y, m, 1, 0.0), sofars::cal::cal2jd(y, m, 1))
                else {
                    continue;
                };
                if out.last().is_none_or(|l| l.1 != dat) {
                    out.push((a + b, dat));
                }
            }
        }
        out
    })
}

/// TAI − UTC (seconds) on the UTC day that starts at Julian date `day_jd`
/// (0h), from [`leap_seconds`]; `None` before 1972.
fn tai_minus_utc_at_day(day_jd: f64) -> Option<f64> {
    if day_jd < LEAP_ERA_JD {
        return None;
    }
    let t = leap_seconds();
    let i = t.partition_point(|(d, _)| *d <= day_jd);
    i.checked_sub(1).map(|i| t[i].1)
}

/// Whether `day_jd` is a Julian date at 0h (rung's normalised `utc1`).
fn is_day_start(day_jd: f64) -> bool {
    (day_jd - 0.5).fract() == 0.0
}

/// The day's TAI − UTC and the length of its UTC day in SI seconds over
/// 86 400 (86 401/86 400 on a day that ends with a leap second).
fn day_scale(day_jd: f64) -> Option<(f64, f64)> {
    // One search: the table's entries are months apart, so at most the next
    // one starts by the next day ([`tai_minus_utc_at_day`] of both days).
    if day_jd < LEAP_ERA_JD {
        return None;
    }
    let t = leap_seconds();
    let i = t.partition_point(|(d, _)| *d <= day_jd);
    let d0 = t[i.checked_sub(1)?].1;
    let d1 = match t.get(i) {
        Some((d, v)) if *d <= day_jd + 1.0 => *v,
        _ => d0,
    };
    Some((d0, (DAY_S + (d1 - d0)) / DAY_S))
}

/// UTC → TAI as SOFA `utctai` computes it, for an instant held as rung holds
/// it (whole day at 0h, fraction in [0, 1)) from 1972 on; `None` otherwise.
fn fast_utc_tai(utc1: f64, utc2: f64) -> Option<(f64, f64)> {
    if !is_day_start(utc1) || !(0.0..1.0).contains(&utc2) {
        return None;
    }
    let (dat0, scale) = day_scale(utc1)?;
    let fd = if scale == 1.0 { utc2 } else { utc2 * scale };
    Some((utc1, fd + dat0 / DAY_S))
}

/// TAI (whole day at 0h UTC of some day from 1972 on, plus a fraction of any
/// size) → UTC as (0h of the UTC day, fraction in [0, 1)), the inverse of
/// [`fast_utc_tai`]; `None` where SOFA must answer (before 1972, or a part
/// that is not a day start).
fn fast_tai_utc(tai1: f64, tai2: f64) -> Option<(f64, f64)> {
    if !is_day_start(tai1) || !tai2.is_finite() || tai2.abs() > 1e4 {
        return None;
    }
    let (mut day, mut f) = (tai1, tai2);
    // Jump to the right day (give or take one), then settle.
    let k = (f - tai_minus_utc_at_day(day)? / DAY_S).floor();
    if k != 0.0 {
        day += k;
        f -= k;
    }
    for _ in 0..4 {
        let (dat0, scale) = day_scale(day)?;
        let u = (f - dat0 / DAY_S) / scale;
        if u < 0.0 {
            day -= 1.0;
            f += 1.0;
        } else if u >= 1.0 {
            day += 1.0;
            f -= 1.0;
        } else {
            return Some((day, u));
        }
    }
    None
}

/// SI seconds from the TAI `(a0, b0)` to the TAI `(a1, b1)`.
fn seconds_between((a0, b0): (f64, f64), (a1, b1): (f64, f64)) -> f64 {
    ((a1 - a0) + (b1 - b0)) * DAY_S
}

/// An instant with its TAI found once, for many instants counted from it
/// ([`TaiBase::add_seconds`], [`TaiBase::seconds_to`]): the same bits as
/// [`Instant::add_seconds`] and [`Instant::seconds_since`] give.
#[derive(Debug, Clone, Copy)]
pub struct TaiBase {
    at: Instant,
    tai: (f64, f64),
}

impl TaiBase {
    /// `at` and its TAI.
    pub fn new(at: Instant) -> Self {
        TaiBase { at, tai: at.tai() }
    }

    /// The instant.
    pub fn instant(&self) -> Instant {
        self.at
    }

    /// `self.instant().add_seconds(s)`.
    pub fn add_seconds(&self, s: f64) -> Instant {
        self.at.add_seconds_to_tai(self.tai, s)
    }

    /// `t.seconds_since(&self.instant())`.
    pub fn seconds_to(&self, t: Instant) -> f64 {
        seconds_between(self.tai, t.tai())
    }
}

impl Instant {
    /// Refuse this instant when it lies outside rung's valid span. Every entry
    /// point that hands an instant to SOFA's ephemerides calls this, because
    /// SOFA `epv00` has no answer outside 1900–2100 and `apco13` would panic.
    /// (The fields are public and [`Instant::add_seconds`] does not check, so
    /// an out-of-span instant can exist; it is refused where it would be used.)
    pub fn check_span(&self) -> Result<()> {
        let jd = self.utc1 + self.utc2;
        check_span(jd, || {
            if jd.is_finite() && (2_000_000.0..3_000_000.0).contains(&jd) {
                self.iso()
            } else {
                format!("JD {jd}")
            }
        })
    }

    /// Build from a calendar date and UTC time of day (seconds may reach 60.x on a
    /// leap-second day). Checks rung's valid span.
    pub fn from_utc_calendar(y: i32, mo: u32, d: u32, h: u32, mi: u32, sec: f64) -> Result<Self> {
        // SOFA dtf2d only warns (status +2) when the seconds run past the end of
        // the minute and then counts them into the next one, so 23:59:60 on an
        // ordinary day would silently become 00:00:00 of the next. Refuse it:
        // second 60 exists only in the last minute of a leap-second day.
        if !sec.is_finite() || sec < 0.0 {
            return Err(RungError::invalid(
                "time",
                format!("{y:04}-{mo:02}-{d:02} {h:02}:{mi:02}: seconds {sec} are not a time"),
            ));
        }
        if sec >= 60.0 && !(sec < 61.0 && h == 23 && mi == 59 && has_leap_second(y, mo, d)) {
            return Err(RungError::invalid(
                "time",
                format!(
                    "{y:04}-{mo:02}-{d:02} {h:02}:{mi:02}:{sec:06.3} does not exist: second 60 occurs only at 23:59 of a day that ends with a leap second (such as 2016-12-31)"
                ),
            ));
        }
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

    /// TAI as a two-part Julian date (SOFA `utctai`; from 1972 on, when the
    /// instant is held as rung holds it, by arithmetic on the leap-second
    /// table of [`leap_seconds`]).
    pub fn tai(&self) -> (f64, f64) {
        if let Some(t) = fast_utc_tai(self.utc1, self.utc2) {
            return t;
        }
        ts::utctai(self.utc1, self.utc2).unwrap_or((self.utc1, self.utc2))
    }

    /// TT as a two-part Julian date.
    pub fn tt(&self) -> (f64, f64) {
        let (a, b) = self.tai();
        ts::taitt(a, b).unwrap_or((a, b))
    }

    /// UT1 as a two-part Julian date, with DUT1 = 0 (see module note).
    pub fn ut1(&self) -> (f64, f64) {
        if let Some((a, b)) = fast_utc_tai(self.utc1, self.utc2) {
            // SOFA utcut1: TAI, then UT1 = TAI + (DUT1 − (TAI − UTC at 0h of the day)).
            let dat0 = tai_minus_utc_at_day(self.utc1).unwrap_or(0.0);
            return (a, b + (DUT1_S - dat0) / DAY_S);
        }
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

    /// Greenwich mean sidereal time, radians in [0, 2π): SOFA `gmst06`
    /// (IAU 2006, consistent with the IAU 2000 Earth rotation angle) from UT1
    /// (DUT1 = 0, see the module note) and TT. Accuracy: the model's own is
    /// microarcseconds; with DUT1 = 0 the result can differ from the true GMST by
    /// up to 0.9 s of time (13.5″). It differs from the older IAU 1982 expression
    /// (Meeus, Astronomical Algorithms, eq. 12.4) by a few milliseconds.
    pub fn gmst_rad(&self) -> f64 {
        let (u1, u2) = self.ut1();
        let (t1, t2) = self.tt();
        sofars::erst::gmst06(u1, u2, t1, t2)
    }

    /// TAI − UTC in seconds at this instant (leap seconds, SOFA `dat`).
    pub fn tai_minus_utc_s(&self) -> f64 {
        let (a, b) = self.tai();
        ((a - self.utc1) + (b - self.utc2)) * DAY_S
    }

    /// The instant `s` SI seconds later (computed through TAI so that leap seconds count).
    pub fn add_seconds(&self, s: f64) -> Instant {
        self.add_seconds_to_tai(self.tai(), s)
    }

    /// [`Instant::add_seconds`] with this instant's TAI (`self.tai()`)
    /// already found ([`TaiBase`]).
    fn add_seconds_to_tai(&self, (a, b): (f64, f64), s: f64) -> Instant {
        let b2 = b + s / DAY_S;
        if let Some((u1, u2)) = fast_tai_utc(a, b2) {
            return Instant { utc1: u1, utc2: u2 };
        }
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
        seconds_between(earlier.tai(), self.tai())
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
    check_date(d)
}

/// Refuse a calendar date outside rung's valid span ([`VALID_FROM`] to
/// [`VALID_TO`]); a night that runs past its end is refused by
/// `Night::new`, which names the instant.
pub fn check_date(d: NaiveDate) -> Result<NaiveDate> {
    let jd = sofars::cal::cal2jd(d.year(), d.month() as i32, d.day() as i32)
        .map(|(a, b)| a + b)
        .unwrap_or(f64::NAN);
    check_span(jd, || d.to_string())?;
    Ok(d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tai_base_is_the_instant_arithmetic() {
        // Counting from a kept TAI gives the bits of `add_seconds` and
        // `seconds_since`, across a leap second (2016-12-31, IERS Bulletin
        // C 52) and on ordinary days.
        for base in ["2016-12-31T12:00:00Z", "2026-12-01T15:00:00Z"] {
            let t0 = parse_instant(base).unwrap();
            let kept = TaiBase::new(t0);
            for k in -200..=200 {
                let s = k as f64 * 613.37 + 0.001 * k as f64;
                let (a, b) = (kept.add_seconds(s), t0.add_seconds(s));
                assert_eq!(
                    (a.utc1.to_bits(), a.utc2.to_bits()),
                    (b.utc1.to_bits(), b.utc2.to_bits())
                );
                assert_eq!(kept.seconds_to(b).to_bits(), b.seconds_since(&t0).to_bits());
            }
        }
    }

    #[test]
    fn day_scale_is_both_days_looked_up() {
        // One search in the table gives what two lookups give (TAI − UTC at
        // the day and the next), every day from 1960 to 2100, leap days
        // (2016-12-31: 86 401 s, IERS Bulletin C 52) included.
        let mut day = VALID_FROM_JD;
        let mut leap_days = 0;
        while day < VALID_TO_JD {
            let two = tai_minus_utc_at_day(day).and_then(|d0| {
                let d1 = tai_minus_utc_at_day(day + 1.0)?;
                Some((d0, (DAY_S + (d1 - d0)) / DAY_S))
            });
            let one = day_scale(day);
            assert_eq!(
                one.map(|(a, b)| (a.to_bits(), b.to_bits())),
                two.map(|(a, b)| (a.to_bits(), b.to_bits())),
                "day {day}"
            );
            if one.is_some_and(|(_, k)| k != 1.0) {
                leap_days += 1;
            }
            day += 1.0;
        }
        assert!(leap_days >= 27, "{leap_days} days with a leap second");
        let end_2016 = Instant::from_utc_calendar(2016, 12, 31, 0, 0, 0.0).unwrap();
        assert_eq!(
            day_scale(end_2016.utc1).map(|x| x.1),
            Some(86_401.0 / 86_400.0)
        );
        assert_eq!(day_scale(f64::NAN), None);
    }

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
    fn arithmetic_time_agrees_with_sofa() {
        // The leap-second table path against SOFA's calendar path, on
        // ordinary days, leap-second days (2016-12-31, 1972-06-30) and their
        // neighbours: TAI, UT1 and the way back agree to 1 ns.
        let ns = 1e-9 / DAY_S;
        for day in [
            "2016-12-30",
            "2016-12-31",
            "2017-01-01",
            "1972-06-30",
            "1972-07-01",
            "2026-12-01",
            "2099-12-30",
        ] {
            let d: NaiveDate = day.parse().unwrap();
            for k in 0..=48 {
                let frac = k as f64 / 48.0 * 0.999_999;
                let (a, b) =
                    sofars::cal::cal2jd(d.year(), d.month() as i32, d.day() as i32).unwrap();
                let t = Instant {
                    utc1: a + b,
                    utc2: frac,
                };
                let (s1, s2) = ts::utctai(t.utc1, t.utc2).unwrap();
                let (f1, f2) = t.tai();
                assert!(((f1 - s1) + (f2 - s2)).abs() < ns, "{day} {frac}: tai");
                let (s1, s2) = ts::utcut1(t.utc1, t.utc2, DUT1_S).unwrap();
                let (f1, f2) = t.ut1();
                assert!(((f1 - s1) + (f2 - s2)).abs() < ns, "{day} {frac}: ut1");
                for ds in [
                    -90_000.0,
                    -3600.0,
                    -0.5,
                    0.25,
                    3600.0,
                    86_400.0,
                    400.0 * 86_400.0,
                ] {
                    let (a, b) = t.tai();
                    let (s1, s2) = ts::taiutc(a, b + ds / DAY_S).unwrap();
                    let u = t.add_seconds(ds);
                    // Compare as SI seconds from the same TAI origin.
                    let w = ts::utctai(s1, s2).unwrap();
                    let g = u.tai();
                    assert!(
                        ((g.0 - w.0) + (g.1 - w.1)).abs() < ns,
                        "{day} {frac} + {ds} s: {:?} vs {:?}",
                        g,
                        w
                    );
                    assert!((0.0..1.0).contains(&u.utc2));
                }
            }
        }
    }

    #[test]
    fn add_seconds_crosses_days() {
        let t = parse_instant("2026-12-01T23:59:30Z").unwrap();
        assert_eq!(t.add_seconds(45.0).iso(), "2026-12-02T00:00:15Z");
        assert_eq!(t.add_seconds(-86_400.0).iso(), "2026-11-30T23:59:30Z");
    }
}
