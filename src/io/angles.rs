//! Reading angles: decimal degrees or sexagesimal text.

use crate::error::{Result, RungError};

fn sexagesimal(text: &str) -> Option<(bool, f64, f64, f64)> {
    let t = text.trim();
    let (neg, body) = match t.strip_prefix('-').or_else(|| t.strip_prefix('−')) {
        Some(b) => (true, b),
        None => (false, t.strip_prefix('+').unwrap_or(t)),
    };
    let parts: Vec<&str> = body
        .split(|c: char| c == ':' || c.is_whitespace() || "hdms°'\"′″".contains(c))
        .filter(|p| !p.is_empty())
        .collect();
    if parts.is_empty() || parts.len() > 3 {
        return None;
    }
    let mut v = [0.0f64; 3];
    for (i, p) in parts.iter().enumerate() {
        let x: f64 = p.parse().ok()?;
        if !x.is_finite() || x < 0.0 {
            return None;
        }
        // Only the last part may carry a fraction; minutes and seconds stay below 60.
        if i + 1 < parts.len() && x.fract() != 0.0 {
            return None;
        }
        if i > 0 && x >= 60.0 {
            return None;
        }
        v[i] = x;
    }
    Some((neg, v[0], v[1], v[2]))
}

fn is_sexagesimal(text: &str) -> bool {
    // One pass over the bytes (this runs for every row of a targets file);
    // the two non-ASCII markers, ° and ′, are looked for only when present.
    let t = text.trim();
    let mut wide = false;
    for b in t.bytes() {
        match b {
            b':' | b' ' | b'h' | b'd' | b'm' | b'\'' => return true,
            0x80.. => wide = true,
            _ => {}
        }
    }
    wide && t.contains(['°', '′'])
}

/// Right ascension: decimal degrees (`83.63`) or hours-minutes-seconds
/// (`05:34:31.9`, `5h34m31.9s`, `05 34 31.9`). Result in degrees, [0, 360).
pub fn parse_ra_deg(text: &str) -> Result<f64> {
    let err = || {
        RungError::parse(
            "right ascension",
            text,
            "expected degrees 0..360 (83.63) or hours HH:MM:SS.s below 24h (05:34:31.9)",
        )
    };
    let t = text.trim();
    if is_sexagesimal(t) {
        let (neg, h, m, s) = sexagesimal(t).ok_or_else(err)?;
        let hours = h + m / 60.0 + s / 3600.0;
        if neg || hours >= 24.0 {
            return Err(err());
        }
        return Ok(hours * 15.0);
    }
    let d: f64 = t.parse().map_err(|_| err())?;
    if !d.is_finite() || !(0.0..=360.0).contains(&d) {
        return Err(err());
    }
    Ok(if d >= 360.0 { 0.0 } else { d })
}

/// Declination: decimal degrees (`-5.39`) or `±DD:MM:SS.s` (`+22:00:52`).
pub fn parse_dec_deg(text: &str) -> Result<f64> {
    let err = || {
        RungError::parse(
            "declination",
            text,
            "expected degrees -90..+90 (-5.39) or ±DD:MM:SS.s (+22:00:52)",
        )
    };
    let t = text.trim();
    let d = if is_sexagesimal(t) {
        let (neg, d, m, s) = sexagesimal(t).ok_or_else(err)?;
        let v = d + m / 60.0 + s / 3600.0;
        if neg { -v } else { v }
    } else {
        t.parse::<f64>().map_err(|_| err())?
    };
    if !d.is_finite() || d.abs() > 90.0 {
        return Err(err());
    }
    Ok(d)
}

/// A general signed angle in degrees, decimal or `±DD:MM:SS`.
pub fn parse_angle_deg(text: &str, what: &str) -> Result<f64> {
    let t = text.trim();
    let v = if is_sexagesimal(t) {
        sexagesimal(t).map(|(neg, d, m, s)| {
            let v = d + m / 60.0 + s / 3600.0;
            if neg { -v } else { v }
        })
    } else {
        t.parse::<f64>().ok()
    };
    match v {
        Some(x) if x.is_finite() => Ok(x),
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
        assert!((parse_dec_deg("+22:00:52").unwrap() - 22.014_444_4).abs() < 1e-6);
        assert!((parse_dec_deg("-00:30:00").unwrap() + 0.5).abs() < 1e-12);
        assert!((parse_dec_deg("-5.39").unwrap() + 5.39).abs() < 1e-12);
        assert_eq!(parse_ra_deg("360").unwrap(), 0.0);
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
        ] {
            assert!(parse_ra_deg(s).is_err(), "{s}");
        }
        for s in ["+91:00:00", "95", "inf", "10:61:00", "1.5:30:00"] {
            assert!(parse_dec_deg(s).is_err(), "{s}");
        }
    }
}
