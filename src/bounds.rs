//! Input bounds from physics, in one place.
//!
//! Every number a user gives rung (a column of a targets file, a key of an
//! instrument or plan file, a command-line option) is checked against the
//! same [`Bound`] here, whichever way it arrives, so a value refused in a
//! file is refused on the command line too, with the same reason. Each bound
//! says why it lies where it does; a bound that also keeps a computation from
//! growing without end says that too (the pulsator's period: the phase plan's
//! work grows as 1/period).
//!
//! Values are shown compactly in messages ([`show`]): `1e300` stays `1e300`,
//! never a 301-digit number.
//!
//! How a refusal reads:
//! - in a file: `t.csv, line 2, field 'period_d': 0.000001 d is not within 0.01..3000 d: …`
//! - on the command line: `invalid --period-d: 0.000001 d is not within 0.01..3000 d: …`
//! - anywhere else in the library: `invalid period_d: …`

use crate::error::{Result, RungError};

/// The accepted range of one kind of number, with its unit and its reason.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bound {
    /// The name of the value as files write it (`period_d`, `aperture_m`).
    pub key: &'static str,
    /// The unit shown after numbers (`d`, `mag`, `m`, `s`; empty for none).
    pub unit: &'static str,
    /// Smallest accepted value.
    pub min: f64,
    /// Largest accepted value (inclusive).
    pub max: f64,
    /// Whether `min` itself is refused (a range such as (0, 1000]).
    pub min_exclusive: bool,
    /// Why the range lies there: what in the sky or the instrument sets it.
    pub why: &'static str,
}

impl Bound {
    /// Whether `v` is accepted (never NaN or infinite).
    pub fn contains(&self, v: f64) -> bool {
        v.is_finite()
            && v <= self.max
            && if self.min_exclusive {
                v > self.min
            } else {
                v >= self.min
            }
    }

    /// The range as text: `-2..30 mag` or `(0, 1000] mas`.
    pub fn range_text(&self) -> String {
        let unit = if self.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", self.unit)
        };
        if self.min_exclusive {
            format!("({}, {}]{unit}", show(self.min), show(self.max))
        } else {
            format!("{}..{}{unit}", show(self.min), show(self.max))
        }
    }

    /// Why `v` is refused, or `None` when it is accepted:
    /// `40 mag is not within -2..30 mag: <why>`.
    pub fn why_not(&self, v: f64) -> Option<String> {
        if self.contains(v) {
            return None;
        }
        let unit = if self.unit.is_empty() || !v.is_finite() {
            String::new()
        } else {
            format!(" {}", self.unit)
        };
        Some(format!(
            "{}{unit} is not within {}: {}",
            show(v),
            self.range_text(),
            self.why
        ))
    }

    /// `v` when accepted; else an [`RungError::Invalid`] naming the key.
    pub fn check(&self, v: f64) -> Result<f64> {
        self.check_as(self.key, v)
    }

    /// `v` when accepted; else an [`RungError::Invalid`] naming `what` (a
    /// command-line option such as `--period-d`, or a field of a named thing).
    pub fn check_as(&self, what: &str, v: f64) -> Result<f64> {
        match self.why_not(v) {
            None => Ok(v),
            Some(why) => Err(RungError::invalid(what, why)),
        }
    }

    /// For readers that report `(field, message)` pairs (the targets reader):
    /// `Err((key, why))` when refused.
    pub fn check_field(&self, v: f64) -> std::result::Result<f64, (String, String)> {
        self.check_field_named(self.key, v)
    }

    /// [`Self::check_field`] for a field of another name with the same bound
    /// (`mean_mag` with [`MAG`], `pm_dec_masyr` with [`PM_MASYR`]).
    pub fn check_field_named(
        &self,
        key: &str,
        v: f64,
    ) -> std::result::Result<f64, (String, String)> {
        match self.why_not(v) {
            None => Ok(v),
            Some(why) => Err((key.to_string(), why)),
        }
    }

    /// An optional value: `None` passes, `Some(v)` is checked as [`Self::check_as`].
    pub fn check_opt_as(&self, what: &str, v: Option<f64>) -> Result<Option<f64>> {
        v.map(|x| self.check_as(what, x)).transpose()
    }
}

/// A number shown compactly: the shortest text that reads back to it, in
/// exponent form beyond a million or below 1e-4 (so `1e300` and `1e-12` stay
/// short); `NaN`, `inf` and `-inf` as such.
pub fn show(v: f64) -> String {
    if v.is_nan() {
        return "NaN".into();
    }
    if v.is_infinite() {
        return if v > 0.0 { "inf".into() } else { "-inf".into() };
    }
    let a = v.abs();
    if a != 0.0 && !(1e-4..1e6).contains(&a) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// A magnitude for a message: to 0.001 mag, trailing zeros dropped
/// (`21.65`, not `21.650000000000002`; `21.905`; `16.3`). JSON keeps the
/// full value.
pub fn show_mag(v: f64) -> String {
    if !v.is_finite() {
        return show(v);
    }
    let t = format!("{v:.3}");
    let t = t.trim_end_matches('0').trim_end_matches('.');
    if t == "-0" { "0".into() } else { t.to_string() }
}

/// A positive amount shown to about three significant figures: `0.4`,
/// `12.3`, `5120`, `1.06e7` (for sizes in messages, not for values read back).
pub fn show_about(v: f64) -> String {
    if !v.is_finite() {
        return show(v);
    }
    let a = v.abs();
    if a >= 1e5 {
        format!("{v:.2e}")
    } else if a >= 100.0 {
        format!("{v:.0}")
    } else {
        format!("{v:.1}")
    }
}

/// Apparent magnitudes of targets (`mag`, `mean_mag`, `peak_mag`, `mag_now`,
/// `--mag`, `--peak-mag`, `--mean-mag`).
pub const MAG: Bound = Bound {
    key: "mag",
    unit: "mag",
    min: -2.0,
    max: 30.0,
    min_exclusive: false,
    why: "no star is brighter than about -1.5 mag and no source fainter than about 30 mag has been measured",
};

/// Peak-to-peak amplitude of a pulsator.
pub const AMPLITUDE_MAG: Bound = Bound {
    key: "amplitude_mag",
    unit: "mag",
    min: 0.0,
    max: 10.0,
    min_exclusive: false,
    why: "the largest light amplitudes of pulsating stars (long-period variables in V) are about 8 mag",
};

/// Foreground extinction of a target in its band.
pub const EXTINCTION_MAG: Bound = Bound {
    key: "extinction_mag",
    unit: "mag",
    min: 0.0,
    max: 20.0,
    min_exclusive: false,
    why: "extinction cannot brighten a star, and behind more than about 20 mag of dust no optical target is seen",
};

/// Pulsation period.
pub const PERIOD_D: Bound = Bound {
    key: "period_d",
    unit: "d",
    min: 0.01,
    max: 3000.0,
    min_exclusive: false,
    why: "pulsators with period-luminosity distances run from about 0.02 d (delta Scuti stars) to about 2000 d (long-period variables), and the phase plan's work grows as 1/period",
};

/// Metallicity [Fe/H] of a pulsator (`feh_dex`).
pub const FEH_DEX: Bound = Bound {
    key: "feh_dex",
    unit: "dex",
    min: -5.0,
    max: 1.0,
    min_exclusive: false,
    why: "pulsators used for distances run from about -3 dex (metal-poor RR Lyrae stars) to about +0.5 dex (inner-disc Cepheids); no star is known below -5 dex with a pulsation distance or above +1 dex",
};

/// Uncertainty of a metallicity (`feh_err_dex`).
pub const FEH_ERR_DEX: Bound = Bound {
    key: "feh_err_dex",
    unit: "dex",
    min: 0.0,
    max: 2.0,
    min_exclusive: false,
    why: "an uncertainty is not negative, and one above 2 dex says nothing about the star",
};

/// Why `h` is not a plan's telescope hours a night, (0, 24] (a plan file,
/// its observing log's re-plans, `--hours-per-night`).
pub fn hours_per_night_why_not(h: f64) -> Option<String> {
    (!(h.is_finite() && h > 0.0 && h <= 24.0)).then(|| format!("{h} is not within (0, 24] hours"))
}

/// Why a period uncertainty `err_d` (days) is refused for a period of
/// `period_d` days (when known), or `None`: it must be zero or positive and
/// smaller than the period itself.
pub fn period_err_why_not(err_d: f64, period_d: Option<f64>) -> Option<String> {
    let p = period_d.filter(|p| PERIOD_D.contains(*p));
    if err_d.is_finite() && err_d >= 0.0 && p.is_none_or(|p| err_d < p) {
        return None;
    }
    Some(match p {
        Some(p) => format!(
            "{} d is not within 0..{} d: an uncertainty is not negative, and one as large as the period ({} d) leaves no phase to plan",
            show(err_d),
            show(p),
            show(p)
        ),
        None => format!(
            "{} d is not a period uncertainty: it must be zero or positive",
            show(err_d)
        ),
    })
}

/// Expected parallax.
pub const PARALLAX_MAS: Bound = Bound {
    key: "parallax_mas",
    unit: "mas",
    min: 0.0,
    max: 1000.0,
    min_exclusive: true,
    why: "a parallax is positive and the nearest star's is about 770 mas",
};

/// Proper motion in either coordinate (μα cos δ, μδ).
pub const PM_MASYR: Bound = Bound {
    key: "pm_ra_masyr",
    unit: "mas/yr",
    min: -20_000.0,
    max: 20_000.0,
    min_exclusive: false,
    why: "no star moves faster than about 10,400 mas/yr",
};

/// V−I colour of a star (a parallax target or its reference stars).
pub const COLOUR_VI_MAG: Bound = Bound {
    key: "color_vi_mag",
    unit: "mag",
    min: -1.0,
    max: 8.0,
    min_exclusive: false,
    why: "stars run from about V-I = -0.4 (the hottest) to about 5 (the coolest dwarfs seen in V)",
};

/// Reference stars measured with a parallax target.
pub const REF_STAR_COUNT: Bound = Bound {
    key: "ref_star_count",
    unit: "",
    min: 3.0,
    max: 1000.0,
    min_exclusive: false,
    why: "a linear plate model (six constants) needs at least three reference stars, and a CCD frame holds at most a few hundred useful ones",
};

/// Redshift of a transient's host.
pub const REDSHIFT: Bound = Bound {
    key: "redshift",
    unit: "",
    min: 0.0,
    max: 3.0,
    min_exclusive: false,
    why: "the chase plans thermonuclear supernovae, seen from ground-based telescopes to z of about 2",
};

/// Clear aperture of a telescope.
pub const APERTURE_M: Bound = Bound {
    key: "aperture_m",
    unit: "m",
    min: 0.01,
    max: 50.0,
    min_exclusive: false,
    why: "from a 1 cm lens to beyond the largest telescope being built (39 m)",
};

/// Pixel scale of a detector.
pub const PIXEL_SCALE_ARCSEC: Bound = Bound {
    key: "pixel_scale_arcsec",
    unit: "arcsec",
    min: 0.001,
    max: 100.0,
    min_exclusive: false,
    why: "from adaptive-optics cameras (a few mas per pixel) to wide-field lenses (tens of arcsec per pixel)",
};

/// Full-well capacity of a pixel.
pub const FULL_WELL_E: Bound = Bound {
    key: "full_well_e",
    unit: "e-",
    min: 100.0,
    max: 1.0e8,
    min_exclusive: false,
    why: "astronomical detectors hold from a few thousand to a few million electrons per pixel",
};

/// Seeing FWHM.
pub const SEEING_ARCSEC: Bound = Bound {
    key: "seeing_fwhm_arcsec",
    unit: "arcsec",
    min: 0.0,
    max: 30.0,
    min_exclusive: true,
    why: "a star image is never a point, and beyond 30 arcsec nothing is measured",
};

/// One exposure time: a total for `rung snr`, the shortest and the longest
/// single exposure of an instrument, the total an exposure search may reach.
pub const EXPTIME_S: Bound = Bound {
    key: "exptime_s",
    unit: "s",
    min: 0.0,
    max: 86_400.0,
    min_exclusive: true,
    why: "an exposure takes time, and one visit's exposure cannot last longer than a day (86,400 s)",
};

/// A signal-to-noise to reach or to report at.
pub const SNR: Bound = Bound {
    key: "snr",
    unit: "",
    min: 0.0,
    max: 10_000.0,
    min_exclusive: true,
    why: "a signal-to-noise is positive, and beyond 10,000 (0.1 mmag) scintillation and flat fields set the error, not photons",
};

/// Largest difference, hours, between a site's zone and the mean solar time
/// of its longitude that is taken as meant. Civil zones stray from their
/// longitude by up to about 3 h (the far west of a country on one zone, with
/// summer time on top); a zone further off (a site at -155° given UTC) is
/// almost always a slip, and local noon in it falls in the dark, cutting the
/// night in two. Such a site is warned and its nights run from mean solar noon.
pub const ZONE_FROM_LONGITUDE_MAX_H: f64 = 4.0;

/// Most sub-exposures one visit may be split into.
pub const MAX_SUB_EXPOSURES: u32 = 10_000;

/// Why a split into `n` sub-exposures is refused (`n` above [`MAX_SUB_EXPOSURES`]).
pub fn too_many_sub_exposures(n: f64) -> String {
    format!(
        "it needs {} sub-exposures, more than the {MAX_SUB_EXPOSURES} one visit may hold (each readout costs time, and the shutter has a shortest exposure)",
        show(n.ceil())
    )
}

/// Every bound, for documentation and the fuzz harness.
pub const ALL: [&Bound; 17] = [
    &MAG,
    &AMPLITUDE_MAG,
    &EXTINCTION_MAG,
    &PERIOD_D,
    &PARALLAX_MAS,
    &PM_MASYR,
    &REDSHIFT,
    &APERTURE_M,
    &PIXEL_SCALE_ARCSEC,
    &FULL_WELL_E,
    &SEEING_ARCSEC,
    &EXPTIME_S,
    &SNR,
    &COLOUR_VI_MAG,
    &REF_STAR_COUNT,
    &FEH_DEX,
    &FEH_ERR_DEX,
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_are_short_and_name_the_range() {
        assert_eq!(
            MAG.check_as("--mag", 40.0).unwrap_err().to_string(),
            "invalid --mag: 40 mag is not within -2..30 mag: no star is brighter than about -1.5 mag and no source fainter than about 30 mag has been measured"
        );
        let e = MAG.why_not(1e300).unwrap();
        assert!(e.starts_with("1e300 mag is not within"), "{e}");
        assert_eq!(show(f64::NAN), "NaN");
        assert_eq!(show(0.000001), "1e-6");
        assert_eq!(show(0.01), "0.01");
        assert_eq!(show(86_400.0), "86400");
        assert_eq!(show_about(1.061_242_19e7), "1.06e7");
        assert_eq!(show_about(0.43), "0.4");
        // A faint phase mean + amplitude/2 = 21.30 + 0.35 in floating point.
        assert_eq!(show_mag(21.30 + 0.35), "21.65");
        assert_eq!(show_mag(21.67 + 0.47 / 2.0), "21.905");
        assert_eq!(show_mag(16.3), "16.3");
        assert_eq!(show_mag(-0.0001), "0");
        assert_eq!(PARALLAX_MAS.range_text(), "(0, 1000] mas");
        assert!(PARALLAX_MAS.check(0.0).is_err());
        assert!(PARALLAX_MAS.check(1000.0).is_ok());
        assert!(MAG.check(f64::INFINITY).is_err());
        assert!(MAG.check(-2.0).is_ok() && MAG.check(30.0).is_ok());
    }
}
