//! Instrument profiles: `config/instruments.toml` (built in) and the user's own
//! `instruments.toml` in the user config folder, resolved by name like sites.

use crate::config::{self, Layer, Named};
use crate::error::{Result, RungError};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::Path;

/// The built-in instrument catalogue (config/instruments.toml), compiled in.
pub const BUILTIN_INSTRUMENTS: &str = config::INSTRUMENTS.builtin;

/// The demo instrument's catalogue name (invented 1.0 m telescope with a CCD).
pub const DEMO_INSTRUMENT: &str = "lucero-1m";

/// A telescope with its detector (see config/instruments.toml for each field).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Instrument {
    /// Catalogue name.
    pub name: String,
    /// Free text.
    #[serde(default)]
    pub description: String,
    /// Clear aperture diameter, m.
    pub aperture_m: f64,
    /// Central obstruction, fraction of the aperture diameter.
    pub obstruction: f64,
    /// Pixel scale, arcsec per pixel.
    pub pixel_scale_arcsec: f64,
    /// Read noise, electrons rms.
    pub read_noise_e: f64,
    /// Dark current, e⁻ pix⁻¹ s⁻¹.
    pub dark_e_per_pix_s: f64,
    /// Gain, e⁻ per ADU.
    pub gain_e_per_adu: f64,
    /// Full well, electrons.
    pub full_well_e: f64,
    /// Converter bits, if the converter saturates before the full well.
    #[serde(default)]
    pub adc_bits: Option<u32>,
    /// Fraction of the saturation level the peak pixel may reach.
    pub linear_fraction: f64,
    /// Typical seeing FWHM, arcsec.
    pub seeing_fwhm_arcsec: f64,
    /// Readout per exposure, s.
    pub readout_s: f64,
    /// Slew and acquisition per visit, s.
    pub visit_overhead_s: f64,
    /// Filter change between the bands of one visit, s (when the profile
    /// gives it, the methods take it from here).
    #[serde(default)]
    pub filter_change_s: Option<f64>,
    /// Night-time calibrations charged once per night the programme
    /// observes (standard-star fields, focus), s.
    #[serde(default)]
    pub calibration_s_per_night: f64,
    /// Shortest exposure, s.
    pub min_exptime_s: f64,
    /// Longest single exposure, s.
    pub max_sub_exptime_s: f64,
    /// Sky annulus radii in units of the seeing FWHM (inner, outer).
    pub sky_annulus_fwhm: [f64; 2],
    /// End-to-end efficiency per band above the atmosphere.
    pub throughput: BTreeMap<String, f64>,
    /// Field of view of the camera on the sky, arcmin: one number for a
    /// square field, or [width along right ascension, height along
    /// declination] (the detector read with north up); absent when unknown.
    #[serde(default)]
    pub fov_arcmin: Option<Fov>,
    /// A long-slit spectrograph on the same telescope, if it has one.
    #[serde(default)]
    pub spectrograph: Option<Spectrograph>,
}

/// A camera's field of view, arcmin (`fov_arcmin` in instruments.toml).
#[derive(Debug, Clone, Copy, PartialEq, Deserialize, Serialize)]
#[serde(untagged)]
pub enum Fov {
    /// A square field of this side.
    Square(f64),
    /// [width along right ascension, height along declination].
    Rect([f64; 2]),
}

impl Fov {
    /// [width along right ascension, height along declination], arcmin.
    pub fn sides_arcmin(&self) -> [f64; 2] {
        match *self {
            Fov::Square(s) => [s, s],
            Fov::Rect(r) => r,
        }
    }
}

impl Instrument {
    /// Collecting area, cm²: π (D/2)² (1 − ε²), ε the linear obstruction.
    pub fn area_cm2(&self) -> f64 {
        let r_cm = self.aperture_m * 50.0;
        std::f64::consts::PI * r_cm * r_cm * (1.0 - self.obstruction * self.obstruction)
    }

    /// Saturation level, electrons: the full well, or the converter's top
    /// count × gain when that is lower.
    pub fn saturation_e(&self) -> f64 {
        match self.adc_bits {
            Some(b) => self
                .full_well_e
                .min(self.gain_e_per_adu * (2f64.powi(b as i32) - 1.0)),
            None => self.full_well_e,
        }
    }

    /// Highest peak-pixel level a planned exposure may reach, electrons.
    pub fn peak_limit_e(&self) -> f64 {
        self.saturation_e() * self.linear_fraction
    }

    /// Throughput in `band`, or an error naming the bands this instrument has.
    pub fn throughput_in(&self, band: &str) -> Result<f64> {
        self.throughput
            .iter()
            .find(|(k, _)| k.as_str() == band)
            .or_else(|| {
                self.throughput
                    .iter()
                    .find(|(k, _)| k.eq_ignore_ascii_case(band))
            })
            .map(|(_, v)| *v)
            .ok_or_else(|| {
                // Name the catalogue's instruments that do have the band.
                let with: Vec<String> = catalogue()
                    .unwrap_or_default()
                    .into_iter()
                    .filter(|i| i.throughput.keys().any(|k| k.eq_ignore_ascii_case(band)))
                    .map(|i| i.name)
                    .collect();
                RungError::Unknown {
                    what: format!("band for instrument {}", self.name),
                    name: band.to_string(),
                    hint: format!(
                        "; it has throughput for: {}{}",
                        self.throughput
                            .keys()
                            .cloned()
                            .collect::<Vec<_>>()
                            .join(", "),
                        if with.is_empty() {
                            String::new()
                        } else {
                            format!("; instruments with {band}: {}", with.join(", "))
                        }
                    ),
                }
            })
    }

    /// Check every field; the error names the field.
    pub fn validated(self) -> Result<Self> {
        let bad = |f: &str, why: String| RungError::invalid(f.to_string(), why);
        let pos = |v: f64, f: &str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(bad(f, format!("{v} must be a positive number")))
            }
        };
        let nonneg = |v: f64, f: &str| {
            if v.is_finite() && v >= 0.0 {
                Ok(())
            } else {
                Err(bad(f, format!("{v} must be zero or positive")))
            }
        };
        use crate::bounds::{
            APERTURE_M, EXPTIME_S, FULL_WELL_E, PIXEL_SCALE_ARCSEC, SEEING_ARCSEC,
        };
        APERTURE_M.check(self.aperture_m)?;
        if !(0.0..1.0).contains(&self.obstruction) {
            return Err(bad(
                "obstruction",
                format!("{} is not a fraction in 0..1", self.obstruction),
            ));
        }
        PIXEL_SCALE_ARCSEC.check(self.pixel_scale_arcsec)?;
        nonneg(self.read_noise_e, "read_noise_e")?;
        nonneg(self.dark_e_per_pix_s, "dark_e_per_pix_s")?;
        pos(self.gain_e_per_adu, "gain_e_per_adu")?;
        FULL_WELL_E.check(self.full_well_e)?;
        if let Some(b) = self.adc_bits
            && !(8..=32).contains(&b)
        {
            return Err(bad("adc_bits", format!("{b} is not within 8..32")));
        }
        if !(self.linear_fraction > 0.0 && self.linear_fraction <= 1.0) {
            return Err(bad(
                "linear_fraction",
                format!("{} is not within (0, 1]", self.linear_fraction),
            ));
        }
        SEEING_ARCSEC.check(self.seeing_fwhm_arcsec)?;
        nonneg(self.readout_s, "readout_s")?;
        nonneg(self.visit_overhead_s, "visit_overhead_s")?;
        if let Some(f) = self.filter_change_s
            && !(f.is_finite() && (0.0..=3600.0).contains(&f))
        {
            return Err(bad(
                "filter_change_s",
                format!("{f} is not within 0..3600 s"),
            ));
        }
        if !(self.calibration_s_per_night.is_finite()
            && (0.0..=14_400.0).contains(&self.calibration_s_per_night))
        {
            return Err(bad(
                "calibration_s_per_night",
                format!(
                    "{} is not within 0..14400 s (at most four hours a night)",
                    self.calibration_s_per_night
                ),
            ));
        }
        EXPTIME_S.check_as("min_exptime_s", self.min_exptime_s)?;
        EXPTIME_S.check_as("max_sub_exptime_s", self.max_sub_exptime_s)?;
        if self.max_sub_exptime_s < self.min_exptime_s {
            return Err(bad(
                "max_sub_exptime_s",
                "is shorter than min_exptime_s".to_string(),
            ));
        }
        let [a, b] = self.sky_annulus_fwhm;
        if !(a.is_finite() && b.is_finite() && a > 0.0 && b > a) {
            return Err(bad(
                "sky_annulus_fwhm",
                format!("[{a}, {b}] must be two radii with 0 < inner < outer"),
            ));
        }
        if self.throughput.is_empty() {
            return Err(bad("throughput", "no band is given".to_string()));
        }
        for (k, v) in &self.throughput {
            if !(v.is_finite() && *v > 0.0 && *v <= 1.0) {
                return Err(bad(
                    &format!("throughput.{k}"),
                    format!("{v} is not an efficiency in (0, 1]"),
                ));
            }
        }
        if let Some(f) = self.fov_arcmin {
            for v in f.sides_arcmin() {
                if !(v.is_finite() && v > 0.0 && v <= 600.0) {
                    return Err(bad(
                        "fov_arcmin",
                        format!("{v} is not a field of view in (0, 600] arcmin"),
                    ));
                }
            }
        }
        let spectrograph = self.spectrograph.map(|s| s.validated()).transpose()?;
        Ok(Instrument {
            spectrograph,
            ..self
        })
    }
}

/// A long-slit spectrograph (see config/instruments.toml for every field).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Spectrograph {
    /// Name.
    pub name: String,
    /// Free text.
    #[serde(default)]
    pub description: String,
    /// Resolving power λ/Δλ (Δλ the resolution element).
    pub resolution: f64,
    /// End-to-end efficiency (telescope, spectrograph, grating, detector) for
    /// light that enters the slit, above the atmosphere, 0..1.
    pub throughput: f64,
    /// Slit width on the sky, arcsec.
    pub slit_width_arcsec: f64,
    /// Scale along the slit, arcsec per pixel.
    pub spatial_scale_arcsec: f64,
    /// Dispersion, Å per pixel.
    pub dispersion_angstrom_per_pix: f64,
    /// Length of the extraction aperture along the slit, in units of the seeing FWHM.
    pub extraction_fwhm: f64,
    /// Read noise, electrons rms per pixel.
    pub read_noise_e: f64,
    /// Dark current, e⁻ per pixel per second.
    pub dark_e_per_pix_s: f64,
    /// Readout per exposure, s.
    pub readout_s: f64,
    /// Slew, acquisition on the slit and calibration lamps per visit, s.
    pub acquisition_s: f64,
    /// Longest single exposure (cosmic rays, guiding), s.
    pub max_sub_exptime_s: f64,
}

impl Spectrograph {
    /// Check every field; the error names the field (prefixed `spectrograph.`).
    pub fn validated(self) -> Result<Self> {
        let bad = |f: &str, why: String| RungError::invalid(format!("spectrograph.{f}"), why);
        let pos = |v: f64, f: &str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(bad(f, format!("{v} must be a positive number")))
            }
        };
        let nonneg = |v: f64, f: &str| {
            if v.is_finite() && v >= 0.0 {
                Ok(())
            } else {
                Err(bad(f, format!("{v} must be zero or positive")))
            }
        };
        if !(self.resolution.is_finite() && (10.0..=200_000.0).contains(&self.resolution)) {
            return Err(bad(
                "resolution",
                format!(
                    "{} is not a resolving power within 10..200000",
                    self.resolution
                ),
            ));
        }
        if !(self.throughput > 0.0 && self.throughput <= 1.0) {
            return Err(bad(
                "throughput",
                format!("{} is not an efficiency in (0, 1]", self.throughput),
            ));
        }
        pos(self.slit_width_arcsec, "slit_width_arcsec")?;
        pos(self.spatial_scale_arcsec, "spatial_scale_arcsec")?;
        pos(
            self.dispersion_angstrom_per_pix,
            "dispersion_angstrom_per_pix",
        )?;
        pos(self.extraction_fwhm, "extraction_fwhm")?;
        nonneg(self.read_noise_e, "read_noise_e")?;
        nonneg(self.dark_e_per_pix_s, "dark_e_per_pix_s")?;
        nonneg(self.readout_s, "readout_s")?;
        nonneg(self.acquisition_s, "acquisition_s")?;
        pos(self.max_sub_exptime_s, "max_sub_exptime_s")?;
        Ok(self)
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct InstrumentFile {
    #[serde(default)]
    instrument: Vec<Instrument>,
}

impl Named for Instrument {
    fn name(&self) -> &str {
        &self.name
    }
}

/// Parse an instruments TOML text; `file` names it in errors (with the line of
/// the offending key and the field; a name given twice in one file is refused).
pub fn parse_instruments(text: &str, file: &Path) -> Result<Vec<Instrument>> {
    let layer = Layer::new(text, file);
    let f: InstrumentFile = config::parse(&layer)?;
    config::entries(&layer, "instrument", f.instrument, |ins| {
        let name = ins.name.clone();
        ins.validated().map_err(|e| match e {
            RungError::Invalid { what, why } => RungError::Invalid {
                what,
                why: format!("instrument {name}: {why}"),
            },
            other => other,
        })
    })
}

/// Every known instrument: built-in (`config/instruments.toml`) with the
/// user's `instruments.toml` merged over it by name.
pub fn catalogue() -> Result<Vec<Instrument>> {
    let mut all = Vec::new();
    for l in config::INSTRUMENTS.layers(None)? {
        config::merge_by_name(&mut all, parse_instruments(&l.text, &l.file)?);
    }
    Ok(all)
}

/// An instrument by catalogue name (exact, then without regard to case).
pub fn resolve(name: &str) -> Result<Instrument> {
    let all = catalogue()?;
    config::find(&all, "instrument", name, "").cloned()
}

/// The demo instrument (from the built-in catalogue, or the user's replacement).
pub fn demo() -> Result<Instrument> {
    resolve(DEMO_INSTRUMENT)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_parses() {
        let all =
            parse_instruments(BUILTIN_INSTRUMENTS, Path::new("config/instruments.toml")).unwrap();
        let d = all.iter().find(|i| i.name == DEMO_INSTRUMENT).unwrap();
        // 1.0 m with a 0.33 obstruction: π 50² (1 − 0.1089) cm².
        assert!((d.area_cm2() - std::f64::consts::PI * 2500.0 * 0.8911).abs() < 1e-6);
        // 16-bit converter at 1.3 e/ADU tops out at 85 195 e, below the 90 000 e full well.
        assert!((d.saturation_e() - 1.3 * 65535.0).abs() < 1e-6);
        assert!(d.throughput_in("v").is_ok());
        assert!(d.throughput_in("K").is_err());
    }

    #[test]
    fn bad_instrument_names_line_and_field() {
        let mut t = BUILTIN_INSTRUMENTS.replace("read_noise_e = 6.0", "read_noise_e = -6.0");
        t.insert_str(0, "# a comment\n");
        let e = parse_instruments(&t, Path::new("i.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("i.toml") && e.contains("read_noise_e"), "{e}");
        let line = t
            .lines()
            .position(|l| l.starts_with("read_noise_e = -6.0"))
            .unwrap()
            + 1;
        assert!(e.contains(&format!("line {line}")), "{e}");
    }

    #[test]
    fn one_name_twice_in_a_file_is_refused() {
        let twice = format!(
            "{BUILTIN_INSTRUMENTS}\n{}",
            &BUILTIN_INSTRUMENTS[BUILTIN_INSTRUMENTS.find("[[instrument]]").unwrap()..]
        );
        let e = parse_instruments(&twice, Path::new("i.toml"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("i.toml") && e.contains("field 'name'") && e.contains("named twice"),
            "{e}"
        );
    }

    #[test]
    fn unknown_instrument() {
        let e = resolve("no-such-scope").unwrap_err().to_string();
        assert!(
            e.contains("unknown instrument") && e.contains(DEMO_INSTRUMENT),
            "{e}"
        );
    }
}
