//! What a night's windows are made of, below both the night
//! (`astro::night`) and the visibility table (`astro::visibility`): the
//! standard altitudes of rising, setting and twilight, an event that may not
//! happen, the observing limits, what one target does in one night, and the
//! overlap of two lists of intervals. `astro::night` re-exports all of it.

use crate::astro::time::Instant;
use crate::error::{Result, RungError};
use serde::Serialize;

/// Sunrise/sunset altitude of the Sun's geometric centre: −0°50′ (Meeus ch. 15).
pub const SUN_RISE_SET_DEG: f64 = -50.0 / 60.0;
/// Civil, nautical and astronomical twilight limits (degrees).
pub const CIVIL_DEG: f64 = -6.0;
/// Nautical twilight limit (degrees).
pub const NAUTICAL_DEG: f64 = -12.0;
/// Astronomical twilight limit (degrees).
pub const ASTRONOMICAL_DEG: f64 = -18.0;
/// Rise/set geometric altitude of a star: −0°34′ (standard refraction at the horizon; Meeus ch. 15).
pub const STAR_RISE_SET_DEG: f64 = -34.0 / 60.0;

/// An event that may not happen, with the reason when it does not.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Event {
    /// When, or `None`.
    pub t: Option<Instant>,
    /// Why there is no time, when there is none.
    pub reason: Option<String>,
}

impl Event {
    /// An event at `t`.
    pub fn at(t: Instant) -> Self {
        Event {
            t: Some(t),
            reason: None,
        }
    }
    /// No event, for `reason`.
    pub fn none(reason: impl Into<String>) -> Self {
        Event {
            t: None,
            reason: Some(reason.into()),
        }
    }
    /// The ISO text, or `None`.
    pub fn iso(&self) -> Option<String> {
        self.t.map(|t| t.iso())
    }
}

/// The overlaps of two time-ordered lists of disjoint intervals (empty
/// overlaps dropped).
pub fn intersect_intervals(
    a: &[(Instant, Instant)],
    b: &[(Instant, Instant)],
) -> Vec<(Instant, Instant)> {
    let (mut i, mut j) = (0, 0);
    let mut out = Vec::new();
    while i < a.len() && j < b.len() {
        let lo = if a[i].0 > b[j].0 { a[i].0 } else { b[j].0 };
        let hi = if a[i].1 < b[j].1 { a[i].1 } else { b[j].1 };
        if lo < hi {
            out.push((lo, hi));
        }
        if a[i].1 < b[j].1 {
            i += 1;
        } else {
            j += 1;
        }
    }
    out
}

/// Observing limits for a window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limits {
    /// Minimum observed altitude, degrees.
    pub min_alt_deg: f64,
    /// The Sun's centre must be below this altitude, degrees.
    pub sun_alt_deg: f64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            min_alt_deg: 30.0,
            sun_alt_deg: ASTRONOMICAL_DEG,
        }
    }
}

impl Limits {
    /// Checked limits.
    pub fn new(min_alt_deg: f64, sun_alt_deg: f64) -> Result<Self> {
        if !min_alt_deg.is_finite() || !(-1.0..=89.0).contains(&min_alt_deg) {
            return Err(RungError::invalid(
                "--min-alt",
                format!("{min_alt_deg} is not within -1..89 degrees"),
            ));
        }
        if !sun_alt_deg.is_finite() || !(-90.0..=0.0).contains(&sun_alt_deg) {
            return Err(RungError::invalid(
                "--sun-alt",
                format!("{sun_alt_deg} is not within -90..0 degrees"),
            ));
        }
        Ok(Limits {
            min_alt_deg,
            sun_alt_deg,
        })
    }
}

/// What one target does in one night.
#[derive(Debug, Clone, PartialEq)]
pub struct TargetNight {
    /// Rise (geometric altitude through −0°34′).
    pub rise: Event,
    /// Upper transit.
    pub transit: Event,
    /// Set.
    pub set: Event,
    /// Observable intervals (above the limit and the horizon mask, Sun below its limit).
    pub windows: Vec<(Instant, Instant)>,
    /// Total observable time, hours.
    pub observable_hours: f64,
    /// Highest observed altitude while the Sun is below its limit, degrees.
    pub max_altitude_deg: Option<f64>,
    /// When that altitude is reached.
    pub max_altitude_time: Option<Instant>,
    /// Kasten–Young airmass at that altitude.
    pub min_airmass: Option<f64>,
}

impl TargetNight {
    /// The longest observable interval.
    pub fn main_window(&self) -> Option<(Instant, Instant)> {
        self.windows.iter().copied().max_by(|a, b| {
            a.1.seconds_since(&a.0)
                .partial_cmp(&b.1.seconds_since(&b.0))
                .unwrap_or(std::cmp::Ordering::Equal)
        })
    }
}
