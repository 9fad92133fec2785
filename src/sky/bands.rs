//! Photometric bands and their sky coefficients: `config/bands.toml` (built
//! in) and the user's own `bands.toml` in the user config folder.

use crate::config::{self, Layer, Named};
use crate::error::{Result, RungError};
use serde::Deserialize;
use std::path::Path;

/// The built-in band table (config/bands.toml), compiled in.
pub const BUILTIN_BANDS: &str = config::BANDS.builtin;

/// Planck constant, erg s (CODATA 2018, exact in SI).
pub const H_CGS: f64 = 6.626_070_15e-27;
/// Speed of light, cm s⁻¹ (exact).
pub const C_CGS: f64 = 2.997_924_58e10;

/// One photometric band with its zero point and sky coefficients (see
/// config/bands.toml for the source of every value).
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Band {
    /// Band name (U, B, V, R, I, …).
    pub name: String,
    /// Effective wavelength, Å.
    pub lambda_eff_angstrom: f64,
    /// Passband FWHM, Å (top-hat width used for photon counts).
    pub bandwidth_angstrom: f64,
    /// f_λ of a magnitude-0 star, erg cm⁻² s⁻¹ Å⁻¹.
    pub flambda_zero_cgs: f64,
    /// Atmospheric extinction, mag per airmass.
    pub extinction_mag_per_airmass: f64,
    /// Dark-sky zenith brightness, mag arcsec⁻².
    pub dark_sky_zenith_mag_arcsec2: f64,
    /// Colour of scattered moonlight, m_band − m_V, mag.
    pub moon_colour_mag: f64,
    /// Colour of the twilight sky, m_band − m_V, mag.
    pub twilight_colour_mag: f64,
    /// A near-infrared band's sky: airglow and thermal emission instead of
    /// the optical Moon model (`[band.infrared]`; docs/science.md, Sky
    /// brightness). Its dark sky (`dark_sky_zenith_mag_arcsec2`) is then the
    /// airglow at the zenith.
    #[serde(default)]
    pub infrared: Option<InfraredSky>,
}

/// The near-infrared sky model of one band (the project's own
/// approximation, each number pinned to published practice in
/// config/bands.toml): OH airglow from a thin layer (van Rhijn 1921) and
/// grey-body thermal emission of the telescope and the atmosphere at the
/// ambient temperature.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InfraredSky {
    /// Height of the airglow layer, km (OH emission near 87–90 km).
    pub airglow_height_km: f64,
    /// Emissivity of the telescope and instrument (warm mirrors, window).
    pub emissivity_telescope: f64,
    /// Emissivity of the atmosphere at the zenith in the band; it grows
    /// with airmass.
    pub emissivity_sky_zenith: f64,
    /// Night-time air and telescope temperature the thermal term is
    /// evaluated at, °C (set it for your site).
    pub ambient_temperature_c: f64,
}
impl Band {
    /// Photon flux density of a magnitude-0 source, photons s⁻¹ cm⁻² Å⁻¹:
    /// f_λ λ_eff / (h c). Zero points of Bessell, Castelli & Plez (1998); for V
    /// this is close to 1000 (common practice).
    pub fn photon_zero_per_s_cm2_angstrom(&self) -> f64 {
        let lambda_cm = self.lambda_eff_angstrom * 1e-8;
        self.flambda_zero_cgs * lambda_cm / (H_CGS * C_CGS)
    }

    /// Photons s⁻¹ cm⁻² through the whole band (top-hat of width
    /// `bandwidth_angstrom`) from a source of magnitude `mag` above the
    /// atmosphere. Accuracy: the top-hat approximation, a few per cent for
    /// smooth spectra.
    pub fn photons_per_s_cm2(&self, mag: f64) -> f64 {
        self.photon_zero_per_s_cm2_angstrom() * self.bandwidth_angstrom * 10f64.powf(-0.4 * mag)
    }

    fn check(&self) -> std::result::Result<(), (&'static str, String)> {
        let pos = |v: f64, f: &'static str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err((f, format!("{v} must be a positive number")))
            }
        };
        pos(self.lambda_eff_angstrom, "lambda_eff_angstrom")?;
        pos(self.bandwidth_angstrom, "bandwidth_angstrom")?;
        pos(self.flambda_zero_cgs, "flambda_zero_cgs")?;
        let k = self.extinction_mag_per_airmass;
        if !k.is_finite() || !(0.0..=5.0).contains(&k) {
            return Err((
                "extinction_mag_per_airmass",
                format!("{k} is not within 0..5 mag per airmass"),
            ));
        }
        let d = self.dark_sky_zenith_mag_arcsec2;
        if !d.is_finite() || !(10.0..=30.0).contains(&d) {
            return Err((
                "dark_sky_zenith_mag_arcsec2",
                format!("{d} is not within 10..30 mag arcsec⁻²"),
            ));
        }
        for (v, f) in [
            (self.moon_colour_mag, "moon_colour_mag"),
            (self.twilight_colour_mag, "twilight_colour_mag"),
        ] {
            if !v.is_finite() || v.abs() > 10.0 {
                return Err((f, format!("{v} is not a colour within ±10 mag")));
            }
        }
        if let Some(ir) = &self.infrared {
            if !(ir.airglow_height_km.is_finite() && (10.0..=500.0).contains(&ir.airglow_height_km))
            {
                return Err((
                    "infrared.airglow_height_km",
                    format!("{} is not within 10..500 km", ir.airglow_height_km),
                ));
            }
            for (v, f) in [
                (ir.emissivity_telescope, "infrared.emissivity_telescope"),
                (ir.emissivity_sky_zenith, "infrared.emissivity_sky_zenith"),
            ] {
                if !(v.is_finite() && (0.0..=1.0).contains(&v)) {
                    return Err((f, format!("{v} is not an emissivity within 0..1")));
                }
            }
            if !(ir.ambient_temperature_c.is_finite()
                && (-80.0..=60.0).contains(&ir.ambient_temperature_c))
            {
                return Err((
                    "infrared.ambient_temperature_c",
                    format!("{} is not within -80..60 °C", ir.ambient_temperature_c),
                ));
            }
        }
        Ok(())
    }
}

/// Parameters of the twilight term (the project's own approximation; see
/// config/bands.toml and [`crate::sky::twilight_v_mag_arcsec2`]).
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TwilightModel {
    /// Sun altitude of the reference point, degrees.
    pub ref_sun_alt_deg: f64,
    /// Zenith V brightness of the twilight light at the reference altitude, mag arcsec⁻².
    pub v_zenith_mag_arcsec2_at_ref: f64,
    /// Fading of the twilight light per degree of solar depression, mag/deg.
    pub slope_mag_per_deg: f64,
    /// Sun altitude below which there is no twilight light, degrees.
    pub dark_sun_alt_deg: f64,
    /// Highest Sun altitude the model covers, degrees.
    pub model_top_sun_alt_deg: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct BandFile {
    #[serde(default)]
    band: Vec<Band>,
    twilight: Option<TwilightModel>,
}

/// The bands known to rung with the twilight model.
#[derive(Debug, Clone, PartialEq)]
pub struct BandSet {
    /// The bands, in file order.
    pub bands: Vec<Band>,
    /// The twilight term.
    pub twilight: TwilightModel,
}

impl Named for Band {
    fn name(&self) -> &str {
        &self.name
    }
}

/// The bands of one file (checked, a name given twice refused) and its
/// `[twilight]` table, if any; errors name the file, line and field.
fn parse_file(text: &str, file: &Path) -> Result<(Vec<Band>, Option<TwilightModel>)> {
    let layer = Layer::new(text, file);
    let f: BandFile = config::parse(&layer)?;
    let bands = config::entries(&layer, "band", f.band, |b| match b.check() {
        Ok(()) => Ok(b),
        Err((field, msg)) => Err(RungError::invalid(field, format!("band {}: {msg}", b.name))),
    })?;
    if let Some(t) = &f.twilight {
        let ok = [
            t.ref_sun_alt_deg,
            t.v_zenith_mag_arcsec2_at_ref,
            t.slope_mag_per_deg,
            t.dark_sun_alt_deg,
            t.model_top_sun_alt_deg,
        ]
        .iter()
        .all(|v| v.is_finite())
            && t.slope_mag_per_deg > 0.0
            && t.dark_sun_alt_deg < t.model_top_sun_alt_deg;
        if !ok {
            return Err(layer.error_at(
                "twilight",
                "twilight needs finite values, slope_mag_per_deg > 0 and dark_sun_alt_deg < model_top_sun_alt_deg",
            ));
        }
    }
    Ok((bands, f.twilight))
}

impl BandSet {
    /// Parse a complete band table (it must have a `[twilight]` table).
    pub fn parse(text: &str, file: &Path) -> Result<Self> {
        let (bands, twilight) = parse_file(text, file)?;
        let layer = Layer::new(text, file);
        let twilight =
            twilight.ok_or_else(|| layer.error_at("twilight", "missing [twilight] table"))?;
        if bands.is_empty() {
            return Err(layer.error_at("band", "no [[band]] tables"));
        }
        Ok(BandSet { bands, twilight })
    }

    /// The built-in table (config/bands.toml).
    pub fn builtin() -> Result<Self> {
        let l = config::BANDS.builtin_layer();
        Self::parse(&l.text, &l.file)
    }

    /// Merge a user file over this set: bands merge by name
    /// ([`config::merge_by_name`]), and its `[twilight]` table (if any)
    /// replaces ours.
    pub fn merge_text(&mut self, text: &str, file: &Path) -> Result<()> {
        let (bands, twilight) = parse_file(text, file)?;
        config::merge_by_name(&mut self.bands, bands);
        if let Some(t) = twilight {
            self.twilight = t;
        }
        Ok(())
    }

    /// The built-in table with the user's `bands.toml` (user config folder) merged over it.
    pub fn load() -> Result<Self> {
        let mut s = Self::builtin()?;
        if let Some(u) = config::BANDS.user_layer()? {
            s.merge_text(&u.text, &u.file)?;
        }
        Ok(s)
    }

    /// A band by name (case-sensitive first, then case-insensitive), or an
    /// `Unknown band` error listing the known ones.
    pub fn get(&self, name: &str) -> Result<&Band> {
        config::find(&self.bands, "band", name, "")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_has_ubvri() {
        let s = BandSet::builtin().unwrap();
        for b in ["U", "B", "V", "R", "I", "J", "H", "K"] {
            assert!(s.get(b).is_ok(), "{b}");
        }
        assert!(s.get("V").unwrap().infrared.is_none());
        assert!(s.get("K").unwrap().infrared.is_some());
        assert!(s.get("v").is_ok());
        let e = s.get("Z").unwrap_err().to_string();
        assert!(e.contains("unknown band 'Z'") && e.contains("V"), "{e}");
    }

    #[test]
    fn bad_band_names_line_and_field() {
        let mut s = BandSet::builtin().unwrap();
        let t = "[[band]]\nname = \"V\"\nlambda_eff_angstrom = 5450\nbandwidth_angstrom = -3\nflambda_zero_cgs = 3.6e-9\nextinction_mag_per_airmass = 0.15\ndark_sky_zenith_mag_arcsec2 = 21.8\nmoon_colour_mag = 0\ntwilight_colour_mag = 0\n";
        let e = s
            .merge_text(t, Path::new("u.toml"))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("u.toml") && e.contains("line 4") && e.contains("bandwidth_angstrom"),
            "{e}"
        );
    }

    #[test]
    fn user_band_replaces_by_name() {
        let mut s = BandSet::builtin().unwrap();
        let t = "[[band]]\nname = \"V\"\nlambda_eff_angstrom = 5450\nbandwidth_angstrom = 880\nflambda_zero_cgs = 3.631e-9\nextinction_mag_per_airmass = 0.2\ndark_sky_zenith_mag_arcsec2 = 21.0\nmoon_colour_mag = 0\ntwilight_colour_mag = 0\n";
        s.merge_text(t, Path::new("u.toml")).unwrap();
        assert_eq!(s.get("V").unwrap().dark_sky_zenith_mag_arcsec2, 21.0);
        assert_eq!(s.bands.len(), 8);
        // Merged in place: V keeps its place in the table.
        assert_eq!(s.bands[2].name, "V");
    }
}
