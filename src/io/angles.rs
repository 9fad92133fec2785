//! Reading angles: decimal degrees or sexagesimal text.
//!
//! A plain number is degrees. Sexagesimal text is read in the unit it is
//! written in: `h` marks hours (`5h34m31.9s`); `°` or `d` mark degrees and
//! `′` `″` arc minutes and seconds (`83°37′58.5″`, `83d37m58.5s`); colons or
//! spaces alone (`05:34:31.9`) are hours for a right ascension and degrees for
//! a declination, as catalogues write them. Text that mixes hours with degree
//! marks is refused, and so is a declination in hours: an angle is never read
//! in a unit it was not written in. ASCII `'` and `"` are minutes and seconds
//! of whichever unit the text is in.

use crate::error::{Result, RungError};

/// The unit sexagesimal text is written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Unit {
    /// Colons, spaces, `m`, `s`, `'`, `"` only: the reader's convention.
    Unmarked,
    /// `h`.
    Hours,
    /// `°`, `d`, `′` or `″`.
    Degrees,
}

/// Why sexagesimal text cannot be read.
enum Bad {
    /// Not a sexagesimal number.
    Form,
    /// Hours and degree marks in one text.
    Mixed,
}

/// (negative, value in the text's unit, unit).
fn sexagesimal(text: &str) -> std::result::Result<(bool, f64, Unit), Bad> {
    let t = text.trim();
    let (neg, body) = match t.strip_prefix('-').or_else(|| t.strip_prefix('−')) {
        Some(b) => (true, b),
        None => (false, t.strip_prefix('+').unwrap_or(t)),
    };
    let mut unit = Unit::Unmarked;
    let mut mark_unit = |u: Unit| -> std::result::Result<(), Bad> {
        if unit != Unit::Unmarked && unit != u {
            return Err(Bad::Mixed);
        }
        unit = u;
        Ok(())
    };
    // Numbers with the place each stands in (0 whole units, 1 minutes, 2
    // seconds) and whether a mark gave it.
    let mut parts: Vec<(f64, bool, usize, bool)> = Vec::new();
    let mut number = String::new();
    let close = |number: &mut String,
                 place: Option<usize>,
                 parts: &mut Vec<(f64, bool, usize, bool)>|
     -> std::result::Result<(), Bad> {
        let before = |parts: &[(f64, bool, usize, bool)]| parts.last().map_or(0, |l| l.2 + 1);
        if number.is_empty() {
            return match (place, parts.pop()) {
                (None, last) => {
                    parts.extend(last);
                    Ok(())
                }
                // A mark after a space (`10 h`) belongs to the number before it.
                (Some(p), Some((x, f, _, false))) if p >= before(parts) && p <= 2 => {
                    parts.push((x, f, p, true));
                    Ok(())
                }
                // A mark with no number of its own (`h` alone, `10h m`).
                _ => Err(Bad::Form),
            };
        }
        let x: f64 = number.parse().map_err(|_| Bad::Form)?;
        let p = place.unwrap_or(before(parts));
        if p < before(parts) || p > 2 || !x.is_finite() || x < 0.0 {
            return Err(Bad::Form);
        }
        parts.push((x, number.contains('.'), p, place.is_some()));
        number.clear();
        Ok(())
    };
    for c in body.chars() {
        match c {
            '0'..='9' | '.' => number.push(c),
            'h' => {
                mark_unit(Unit::Hours)?;
                close(&mut number, Some(0), &mut parts)?;
            }
            'd' | '°' => {
                mark_unit(Unit::Degrees)?;
                close(&mut number, Some(0), &mut parts)?;
            }
            '′' => {
                mark_unit(Unit::Degrees)?;
                close(&mut number, Some(1), &mut parts)?;
            }
            '″' => {
                mark_unit(Unit::Degrees)?;
                close(&mut number, Some(2), &mut parts)?;
            }
            'm' | '\'' => close(&mut number, Some(1), &mut parts)?,
            's' | '"' => close(&mut number, Some(2), &mut parts)?,
            ':' => {
                if number.is_empty() {
                    return Err(Bad::Form);
                }
                close(&mut number, None, &mut parts)?
            }
            c if c.is_whitespace() => close(&mut number, None, &mut parts)?,
            _ => return Err(Bad::Form),
        }
    }
    close(&mut number, None, &mut parts)?;
    if parts.is_empty() {
        return Err(Bad::Form);
    }
    let mut v = 0.0;
    for (i, (x, fraction, place, _)) in parts.iter().enumerate() {
        // Only the last number may carry a fraction; minutes and seconds stay below 60.
        if (*fraction && i + 1 < parts.len()) || (*place > 0 && *x >= 60.0) {
            return Err(Bad::Form);
        }
        v += x / 60f64.powi(*place as i32);
    }
    Ok((neg, v, unit))
}

/// A plain decimal number, if the text is one (`83.63`, `-5.39`).
fn decimal(text: &str) -> Option<f64> {
    let t = text.trim();
    // Only digits, a sign, a point and an exponent: "inf" and "nan" are not angles.
    if t.is_empty()
        || !t
            .chars()
            .all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E'))
    {
        return None;
    }
    t.parse::<f64>().ok()
}

const MIXED: &str = "hours (h) and degrees (°, d, ′, ″) are mixed in one angle; write hours as 10h30m00s or degrees as 157°30′00″";

/// Right ascension: decimal degrees (`83.63`), degrees with marks
/// (`83°37′58.5″`, `83d37m58.5s`), or hours (`05:34:31.9`, `5h34m31.9s`,
/// `05 34 31.9`). Result in degrees, [0, 360).
pub fn parse_ra_deg(text: &str) -> Result<f64> {
    let err = || {
        RungError::parse(
            "right ascension",
            text,
            "expected degrees 0..360 (83.63) or hours HH:MM:SS.s below 24h (05:34:31.9)",
        )
    };
    let deg = match decimal(text) {
        Some(d) => d,
        None => match sexagesimal(text) {
            Err(Bad::Mixed) => return Err(RungError::parse("right ascension", text, MIXED)),
            Err(Bad::Form) => return Err(err()),
            Ok((true, ..)) => return Err(err()),
            Ok((false, v, Unit::Degrees)) => v,
            Ok((false, h, _)) => {
                if h >= 24.0 {
                    return Err(err());
                }
                h * 15.0
            }
        },
    };
    if !deg.is_finite() || !(0.0..=360.0).contains(&deg) {
        return Err(err());
    }
    Ok(if deg >= 360.0 { 0.0 } else { deg })
}

/// Declination: decimal degrees (`-5.39`), `±DD:MM:SS.s` (`+22:00:52`) or
/// degrees with marks (`-5°23′`, `-5d23m`). Hours are refused.
pub fn parse_dec_deg(text: &str) -> Result<f64> {
    let err = || {
        RungError::parse(
            "declination",
            text,
            "expected degrees -90..+90 (-5.39) or ±DD:MM:SS.s (+22:00:52)",
        )
    };
    let d = signed_degrees(text).map_err(|b| match b {
        Some(why) => RungError::parse("declination", text, why),
        None => err(),
    })?;
    if !d.is_finite() || d.abs() > 90.0 {
        return Err(err());
    }
    Ok(d)
}

/// Degrees from decimal or sexagesimal text; `Err(Some(why))` for text in
/// hours or mixed units, `Err(None)` for text that is no angle.
fn signed_degrees(text: &str) -> std::result::Result<f64, Option<&'static str>> {
    if let Some(d) = decimal(text) {
        return Ok(d);
    }
    match sexagesimal(text) {
        Err(Bad::Mixed) => Err(Some(MIXED)),
        Err(Bad::Form) => Err(None),
        Ok((_, _, Unit::Hours)) => Err(Some(
            "an angle in degrees cannot be written in hours (h); write degrees as -5.39, -5:23:24 or -5°23′24″",
        )),
        Ok((neg, v, _)) => Ok(if neg { -v } else { v }),
    }
}

/// A general signed angle in degrees, decimal, `±DD:MM:SS` or with degree marks.
pub fn parse_angle_deg(text: &str, what: &str) -> Result<f64> {
    match signed_degrees(text) {
        Ok(x) if x.is_finite() => Ok(x),
        Err(Some(why)) => Err(RungError::parse(what, text, why)),
        _ => Err(RungError::parse(
            what,
            text,
            "expected degrees, decimal or ±DD:MM:SS",
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sexagesimal_forms() {
        assert!((parse_ra_deg("05:34:31.9").unwrap() - 83.632_916_7).abs() < 1e-6);
        assert!((parse_ra_deg("5h34m31.9s").unwrap() - 83.632_916_7).abs() < 1e-6);
        assert!((parse_ra_deg("05 34 31.9").unwrap() - 83.632_916_7).abs() < 1e-6);
        assert!((parse_dec_deg("+22:00:52").unwrap() - 22.014_444_4).abs() < 1e-6);
        assert!((parse_dec_deg("-00:30:00").unwrap() + 0.5).abs() < 1e-12);
        assert!((parse_dec_deg("-5.39").unwrap() + 5.39).abs() < 1e-12);
        assert!((parse_dec_deg("-5°23′24″").unwrap() + 5.39).abs() < 1e-12);
        assert!((parse_dec_deg("-5d23m24s").unwrap() + 5.39).abs() < 1e-12);
        assert_eq!(parse_ra_deg("360").unwrap(), 0.0);
    }

    #[test]
    fn an_angle_is_read_in_the_unit_it_is_written_in() {
        // Degrees marked as degrees are degrees, never hours (157.5° was the old answer).
        for s in ["10°30′00″", "10d30m00s", "10°30'00\"", "10.5°", "10 °30′"] {
            assert!((parse_ra_deg(s).unwrap() - 10.5).abs() < 1e-12, "{s}");
        }
        // Hours stay hours.
        for s in [
            "10h30m",
            "10:30:00",
            "10h30m00s",
            "10.5h",
            "10 30",
            "10 h 30 m",
        ] {
            assert!((parse_ra_deg(s).unwrap() - 157.5).abs() < 1e-12, "{s}");
        }
        // A number with no mark after a mark of a larger place is the next place.
        assert!((parse_ra_deg("10h30").unwrap() - 157.5).abs() < 1e-12);
        for s in ["10h30′", "10°30m00sh", "10d30h"] {
            let e = parse_ra_deg(s).unwrap_err().to_string();
            assert!(e.contains("mixed"), "{s}: {e}");
        }
        let e = parse_dec_deg("10h30m").unwrap_err().to_string();
        assert!(e.contains("cannot be written in hours"), "{e}");
        assert!(parse_ra_deg("370°").is_err());
        assert!(parse_ra_deg("30s10m").is_err(), "places out of order");
        assert!(parse_ra_deg("10h30m15m").is_err(), "minutes twice");
    }

    #[test]
    fn bad_angles() {
        for s in [
            "24:00:00",
            "12:60:00",
            "abc",
            "",
            "-01:00:00",
            "400",
            "nan",
            "1:2:3:4",
            "inf",
            "h",
            "10::30",
        ] {
            assert!(parse_ra_deg(s).is_err(), "{s}");
        }
        for s in ["+91:00:00", "95", "inf", "10:61:00", "1.5:30:00", "-nan"] {
            assert!(parse_dec_deg(s).is_err(), "{s}");
        }
    }
}
