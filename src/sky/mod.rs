//! Sky brightness at a target and instant: the dark sky scaled with airmass,
//! the Moon term of Krisciunas & Schaefer (1991, PASP 103, 1033), a twilight
//! term (the project's own approximation), and atmospheric extinction.
//!
//! Surface brightness is carried in nanoLamberts (nL) inside the K&S formulas,
//! as in the paper, and converted to mag arcsec⁻² with the paper's eq. (1):
//! B(nL) = 34.08 exp(20.7233 − 0.92104 V). The same conversion is used for
//! every band (it is a pure 10^(−0.4 m) scaling, since 0.92104 ≈ 0.4 ln 10), so
//! light from the different terms can be added in any band.
//!
//! The K&S formulas and equation numbers cited in this module are quoted from
//! memory of the paper; the code is checked against an independent numpy
//! implementation (tests/reference/make_sky_fixtures.py, tests/photometry_sky.rs).

pub mod bands;
pub mod dust;

use crate::astro::frames::{CatalogPlace, Context, Observed};
use crate::error::{Result, RungError};
pub use bands::{Band, BandSet, InfraredSky, TwilightModel};
use serde::Serialize;

/// Surface brightness in nanoLamberts of a sky of `mag` mag arcsec⁻²:
/// B = 34.08 exp(20.7233 − 0.92104 m), Krisciunas & Schaefer (1991) eq. (1).
pub fn nl_from_mag(mag_arcsec2: f64) -> f64 {
    34.08 * (20.7233 - 0.92104 * mag_arcsec2).exp()
}

/// Inverse of [`nl_from_mag`]: m = (20.7233 − ln(B / 34.08)) / 0.92104 mag arcsec⁻²
/// (Krisciunas & Schaefer 1991, eq. 1).
pub fn mag_from_nl(b_nl: f64) -> f64 {
    (20.7233 - (b_nl / 34.08).ln()) / 0.92104
}

/// Krisciunas & Schaefer (1991) eq. (3): the airmass used in their sky model,
/// X(Z) = (1 − 0.96 sin² Z)^−1/2, from the zenith distance `z_rad` (radians).
/// Finite at the horizon (X = 5 at Z = 90°); meant for the scattering geometry,
/// not for stellar extinction (use Kasten–Young there).
pub fn ks_airmass(z_rad: f64) -> f64 {
    (1.0 - 0.96 * z_rad.sin().powi(2)).powf(-0.5)
}

/// Krisciunas & Schaefer (1991) eq. (20): illuminance of the Moon outside the
/// atmosphere, in the paper's units, I* = 10^(−0.4 (3.84 + 0.026 |α| + 4·10⁻⁹ α⁴)),
/// α the lunar phase angle in degrees (0 at full Moon), here given in radians.
/// The opposition surge near full Moon (|α| ≲ 7°) is not represented (from memory
/// of the paper's discussion).
pub fn ks_moon_illuminance(phase_rad: f64) -> f64 {
    let a = phase_rad.to_degrees().abs();
    10f64.powf(-0.4 * (3.84 + 0.026 * a + 4e-9 * a.powi(4)))
}

/// Krisciunas & Schaefer (1991) eqs. (17)–(21): the scattering function
/// f(ρ) = f_R + f_M, Rayleigh f_R = 10^5.36 (1.06 + cos² ρ) and Mie
/// f_M = 10^(6.15 − ρ/40) for ρ > 10°, or 6.2·10⁷ ρ⁻² for ρ ≤ 10° (ρ in
/// degrees, the Moon–target separation, given here in radians; ρ is floored
/// at 0.25°, the Moon's radius).
pub fn ks_scattering(sep_rad: f64) -> f64 {
    let rho = sep_rad.to_degrees().abs();
    let f_r = 10f64.powf(5.36) * (1.06 + sep_rad.cos().powi(2));
    let f_m = if rho > 10.0 {
        10f64.powf(6.15 - rho / 40.0)
    } else {
        6.2e7 / rho.max(0.25).powi(2)
    };
    f_r + f_m
}

/// Krisciunas & Schaefer (1991) eq. (15): sky brightness from scattered
/// moonlight, nL,
/// B_moon = f(ρ) I* 10^(−0.4 k X(Z_m)) [1 − 10^(−0.4 k X(Z))].
/// Inputs: lunar phase angle `phase_rad` (0 = full), Moon–target separation
/// `sep_rad`, zenith distances of the Moon `z_moon_rad` and of the target
/// `z_rad` (radians), extinction `k` (mag/airmass). Zero when the Moon is below
/// the horizon (Z_m ≥ 90°). Accuracy: the paper quotes agreement with its
/// observations to 8–23 % in brightness (quoted from memory).
pub fn ks_moon_nl(phase_rad: f64, sep_rad: f64, z_moon_rad: f64, z_rad: f64, k: f64) -> f64 {
    if z_moon_rad >= std::f64::consts::FRAC_PI_2 {
        return 0.0;
    }
    let xm = ks_airmass(z_moon_rad);
    let x = ks_airmass(z_rad);
    ks_scattering(sep_rad)
        * ks_moon_illuminance(phase_rad)
        * 10f64.powf(-0.4 * k * xm)
        * (1.0 - 10f64.powf(-0.4 * k * x))
}

/// Krisciunas & Schaefer (1991) eq. (2): dark-sky brightness at zenith
/// distance `z_rad` from the zenith value `b_zen_nl` (nL),
/// B = B_zen 10^(−0.4 k (X − 1)) X with X from [`ks_airmass`].
pub fn ks_dark_nl(b_zen_nl: f64, z_rad: f64, k: f64) -> f64 {
    let x = ks_airmass(z_rad);
    b_zen_nl * 10f64.powf(-0.4 * k * (x - 1.0)) * x
}

/// The twilight light at the zenith in V, mag arcsec⁻², at Sun altitude
/// `sun_alt_rad` (radians), or `None` when the Sun is below
/// `dark_sun_alt_deg` (no twilight). The project's own approximation (see
/// config/bands.toml): linear in magnitude with solar depression,
/// m = m_ref + s (h_ref − h☉). Above `model_top_sun_alt_deg` the value at that
/// altitude is returned (the real sky is brighter; callers say so).
pub fn twilight_v_mag_arcsec2(sun_alt_rad: f64, m: &TwilightModel) -> Option<f64> {
    let h = sun_alt_rad.to_degrees();
    if h <= m.dark_sun_alt_deg {
        return None;
    }
    let h = h.min(m.model_top_sun_alt_deg);
    Some(m.v_zenith_mag_arcsec2_at_ref + m.slope_mag_per_deg * (m.ref_sun_alt_deg - h))
}

/// Mean radius of the Earth, km (IUGG, a fact of the trade).
pub const EARTH_RADIUS_KM: f64 = 6371.0;

/// Boltzmann constant, erg K⁻¹ (exact in SI since 2019).
pub const K_B_CGS: f64 = 1.380_649e-16;

/// The van Rhijn (1921) factor: how much brighter a thin emitting layer at
/// height `height_km` looks at zenith distance `z_rad` than at the zenith,
/// V(z) = [1 − (R/(R + h))² sin² z]^−1/2, R the Earth's radius (the path
/// through the layer grows as 1/cos of the angle at the layer). Finite at
/// the horizon: 1/√(1 − (R/(R+h))²), about 6 for h = 87 km.
pub fn van_rhijn(z_rad: f64, height_km: f64) -> f64 {
    let r = EARTH_RADIUS_KM / (EARTH_RADIUS_KM + height_km);
    (1.0 - r * r * z_rad.sin().powi(2)).powf(-0.5)
}

/// Planck's law, B_λ(T) in erg s⁻¹ cm⁻² Å⁻¹ sr⁻¹ at wavelength
/// `lambda_angstrom` (Å) and temperature `t_k` (K).
pub fn planck_flambda_per_sr(lambda_angstrom: f64, t_k: f64) -> f64 {
    let l = lambda_angstrom * 1e-8; // cm
    let x = bands::H_CGS * bands::C_CGS / (l * K_B_CGS * t_k);
    // erg s⁻¹ cm⁻² cm⁻¹ sr⁻¹, then per Å.
    2.0 * bands::H_CGS * bands::C_CGS * bands::C_CGS / l.powi(5) / x.exp_m1() * 1e-8
}

/// Surface brightness of a black body at `t_k` (K) seen through `band`,
/// mag arcsec⁻²: the photon rate of B_λ(T) over the band's top-hat passband
/// (`lambda_eff` ± `bandwidth`/2, Simpson's rule on 64 intervals) against
/// that of the band's zero point over the same width. A grey body of
/// emissivity ε is 2.5 log10(1/ε) fainter.
pub fn blackbody_mag_arcsec2(band: &Band, t_k: f64) -> f64 {
    let sr_per_arcsec2 = (std::f64::consts::PI / 180.0 / 3600.0).powi(2);
    let lo = band.lambda_eff_angstrom - band.bandwidth_angstrom / 2.0;
    let n = 64;
    let h = band.bandwidth_angstrom / n as f64;
    // Photon rate ∝ ∫ B_λ λ dλ (the 1/hc common to both sides cancels).
    let f = |l: f64| planck_flambda_per_sr(l, t_k) * l;
    let mut sum = f(lo) + f(lo + band.bandwidth_angstrom);
    for i in 1..n {
        sum += f(lo + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    let photons = sum * h / 3.0 * sr_per_arcsec2;
    let zero = band.flambda_zero_cgs * band.lambda_eff_angstrom * band.bandwidth_angstrom;
    -2.5 * (photons / zero).log10()
}

/// The near-infrared sky at zenith distance `z_rad` in a band with an
/// `infrared` table: (airglow, thermal) in nL. Airglow: the zenith value
/// (`dark_sky_zenith_mag_arcsec2`) times the van Rhijn factor of its layer,
/// dimmed by the extinction along the extra path, B = B_zen V(z) 10^(−0.4 k (V(z) − 1));
/// thermal: a grey body at the ambient temperature whose emissivity is the
/// telescope's plus the atmosphere's times the airmass
/// (ε = ε_tel + ε_sky X, at most 1), X from [`ks_airmass`]. The project's own
/// approximation (docs/science.md, Sky brightness).
pub fn infrared_sky_nl(band: &Band, ir: &InfraredSky, z_rad: f64) -> (f64, f64) {
    let k = band.extinction_mag_per_airmass;
    let v = van_rhijn(z_rad, ir.airglow_height_km);
    let airglow =
        nl_from_mag(band.dark_sky_zenith_mag_arcsec2) * v * 10f64.powf(-0.4 * k * (v - 1.0));
    let eps = (ir.emissivity_telescope + ir.emissivity_sky_zenith * ks_airmass(z_rad)).min(1.0);
    let thermal = if eps > 0.0 {
        nl_from_mag(blackbody_mag_arcsec2(
            band,
            ir.ambient_temperature_c + 273.15,
        )) * eps
    } else {
        0.0
    };
    (airglow, thermal)
}

/// Atmospheric extinction of a star, mag: k X (first order; k from the band
/// table, X the Kasten–Young airmass).
pub fn extinction_mag(band: &Band, airmass: f64) -> f64 {
    band.extinction_mag_per_airmass * airmass
}

/// One instant's context with its Moon and Sun (observed places) and the
/// Moon's phase angle, what [`SkyGeometry::at_in`] shares between targets.
#[derive(Debug, Clone)]
pub struct SkyAt {
    /// The context.
    pub ctx: Context,
    /// `ctx.moon()`.
    pub moon: Observed,
    /// `ctx.sun()`.
    pub sun: Observed,
    /// `ctx.moon_phase_angle_rad()`.
    pub moon_phase_rad: f64,
}

impl SkyAt {
    /// The Moon, Sun and phase of `ctx`.
    pub fn new(ctx: &Context) -> Self {
        SkyAt {
            ctx: *ctx,
            moon: ctx.moon(),
            sun: ctx.sun(),
            moon_phase_rad: ctx.moon_phase_angle_rad(),
        }
    }
}

/// The geometry the sky model needs, at one target and instant.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SkyGeometry {
    /// Observed (refracted) altitude of the target, radians.
    pub target_alt_rad: f64,
    /// Geometric altitude of the Moon's centre (topocentric), radians.
    pub moon_alt_rad: f64,
    /// Moon–target separation, radians.
    pub moon_sep_rad: f64,
    /// Lunar phase angle, radians (0 = full Moon).
    pub moon_phase_rad: f64,
    /// Geometric altitude of the Sun's centre, radians.
    pub sun_alt_rad: f64,
}

impl SkyGeometry {
    /// The geometry of `place` seen through `ctx` (SOFA observed places of the
    /// target, Sun and Moon; phase from `Context::moon_phase_angle_rad`).
    pub fn at(ctx: &Context, place: &CatalogPlace) -> Self {
        Self::at_seen(ctx, &ctx.observe(place))
    }

    /// [`SkyGeometry::at`] with the Moon, the Sun and the phase of the
    /// instant found once ([`SkyAt::new`]), for many targets at one instant:
    /// the same numbers.
    pub fn at_in(sky: &SkyAt, place: &CatalogPlace) -> Self {
        Self::seen_in(sky, &sky.ctx.observe(place))
    }

    /// [`SkyGeometry::at`] with the target's observed place through `ctx`
    /// (`ctx.observe(place)`) already known: the same numbers.
    pub fn at_seen(ctx: &Context, seen: &Observed) -> Self {
        // SkyAt::new's parts, without copying the context.
        let moon = ctx.moon();
        SkyGeometry {
            target_alt_rad: seen.alt_rad,
            moon_alt_rad: moon.alt_geom_rad,
            moon_sep_rad: seen.separation_rad(&moon),
            moon_phase_rad: ctx.moon_phase_angle_rad(),
            sun_alt_rad: ctx.sun().alt_geom_rad,
        }
    }

    /// The geometry of the target observed at `o` through `sky.ctx`.
    fn seen_in(sky: &SkyAt, o: &Observed) -> Self {
        SkyGeometry {
            target_alt_rad: o.alt_rad,
            moon_alt_rad: sky.moon.alt_geom_rad,
            moon_sep_rad: o.separation_rad(&sky.moon),
            moon_phase_rad: sky.moon_phase_rad,
            sun_alt_rad: sky.sun.alt_geom_rad,
        }
    }
}

/// Sky brightness at a target, one band, with its parts.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SkyBrightness {
    /// Band name.
    pub band: String,
    /// Total sky brightness, mag arcsec⁻².
    pub sky_mag_arcsec2: f64,
    /// Dark sky at the target (airmass-scaled), mag arcsec⁻².
    pub dark_mag_arcsec2: f64,
    /// Moon term alone, mag arcsec⁻² (`None` when the Moon is down).
    pub moon_mag_arcsec2: Option<f64>,
    /// Twilight term alone, mag arcsec⁻² (`None` when the Sun is below the dark limit).
    pub twilight_mag_arcsec2: Option<f64>,
    /// Brightening over the dark zenith sky, mag (positive = brighter).
    pub brightening_mag: f64,
    /// Which model: `optical` (dark sky, Moon, twilight) or `infrared`
    /// (airglow, thermal emission, twilight).
    pub model: String,
    /// Airglow alone at the target, mag arcsec⁻² (infrared model).
    pub airglow_mag_arcsec2: Option<f64>,
    /// Thermal emission alone, mag arcsec⁻² (infrared model).
    pub thermal_mag_arcsec2: Option<f64>,
    /// Cautions about the model's validity here.
    pub notes: Vec<String>,
}

/// The light of [`sky_brightness`]'s parts, nL (the twilight as its
/// magnitude), and their sum.
struct SkyLight {
    ir: Option<(f64, f64)>,
    dark: f64,
    moon: f64,
    tw_mag: Option<f64>,
    total: f64,
}

/// The light [`sky_brightness`] adds up, each part the same expression.
fn sky_light(band: &Band, tw: &TwilightModel, g: &SkyGeometry) -> Result<SkyLight> {
    if g.target_alt_rad.is_nan() || g.target_alt_rad <= 0.0 {
        return Err(RungError::invalid(
            "target position",
            format!(
                "the target is below the horizon (altitude {:.1}°); no sky brightness or signal-to-noise there",
                g.target_alt_rad.to_degrees()
            ),
        ));
    }
    let z = std::f64::consts::FRAC_PI_2 - g.target_alt_rad;
    let k = band.extinction_mag_per_airmass;
    let z_moon = std::f64::consts::FRAC_PI_2 - g.moon_alt_rad;
    // The near-infrared sky: airglow and thermal emission, no Moon term.
    let ir = band
        .infrared
        .as_ref()
        .map(|ir| infrared_sky_nl(band, ir, z));
    let dark = match ir {
        Some((a, t)) => a + t,
        None => ks_dark_nl(nl_from_mag(band.dark_sky_zenith_mag_arcsec2), z, k),
    };
    let moon_v = if ir.is_some() {
        0.0
    } else {
        ks_moon_nl(g.moon_phase_rad, g.moon_sep_rad, z_moon, z, k)
    };
    let moon = if moon_v > 0.0 {
        nl_from_mag(mag_from_nl(moon_v) + band.moon_colour_mag)
    } else {
        0.0
    };
    let tw_mag = twilight_v_mag_arcsec2(g.sun_alt_rad, tw).map(|m| m + band.twilight_colour_mag);
    let twl = tw_mag.map(nl_from_mag).unwrap_or(0.0);
    let total = dark + moon + twl;
    Ok(SkyLight {
        ir,
        dark,
        moon,
        tw_mag,
        total,
    })
}

/// The total sky brightness of [`sky_brightness`] alone, mag arcsec⁻²
/// (`sky_mag_arcsec2`, the same number and the same refusal), without its
/// parts' magnitudes and notes.
pub fn sky_mag_arcsec2(band: &Band, tw: &TwilightModel, g: &SkyGeometry) -> Result<f64> {
    Ok(mag_from_nl(sky_light(band, tw, g)?.total))
}

/// Sky brightness in `band` for the geometry `g`: the K&S dark sky scaled with
/// airmass, the K&S Moon term (evaluated with the band's extinction and shifted
/// by the band's moonlight colour: exact K&S in V, an approximation in other
/// bands), and the twilight term shifted by the band's twilight colour, added
/// as light. Error when the target is below the horizon. Accuracy: K&S quote
/// 8–23 % in V (from memory); other bands and twilight are approximations.
pub fn sky_brightness(band: &Band, tw: &TwilightModel, g: &SkyGeometry) -> Result<SkyBrightness> {
    let SkyLight {
        ir,
        dark,
        moon,
        tw_mag,
        total,
    } = sky_light(band, tw, g)?;
    let sky = mag_from_nl(total);
    let mut notes = Vec::new();
    if g.sun_alt_rad.to_degrees() > tw.model_top_sun_alt_deg {
        notes.push(format!(
            "the Sun is at {:.1}°, above {:.0}°: the twilight model stops there and the real sky is brighter than {:.2} mag/arcsec²",
            g.sun_alt_rad.to_degrees(),
            tw.model_top_sun_alt_deg,
            sky
        ));
    }
    if ir.is_some() && g.moon_alt_rad > 0.0 && g.moon_sep_rad.to_degrees() < 20.0 {
        notes.push(format!(
            "the target is {:.1}° from the Moon: the near-infrared model leaves moonlight out, and this close it may brighten the sky, most in J",
            g.moon_sep_rad.to_degrees()
        ));
    }
    if moon > 0.0 && g.moon_sep_rad.to_degrees() < 10.0 {
        notes.push(format!(
            "the target is {:.1}° from the Moon: scattered light there is poorly known",
            g.moon_sep_rad.to_degrees()
        ));
    }
    Ok(SkyBrightness {
        band: band.name.clone(),
        sky_mag_arcsec2: sky,
        dark_mag_arcsec2: mag_from_nl(dark),
        moon_mag_arcsec2: (moon > 0.0).then(|| mag_from_nl(moon)),
        twilight_mag_arcsec2: tw_mag,
        brightening_mag: band.dark_sky_zenith_mag_arcsec2 - sky,
        model: if ir.is_some() { "infrared" } else { "optical" }.into(),
        airglow_mag_arcsec2: ir.map(|(a, _)| mag_from_nl(a)),
        thermal_mag_arcsec2: ir.and_then(|(_, t)| (t > 0.0).then(|| mag_from_nl(t))),
        notes,
    })
}

impl BandSet {
    /// Sky brightness in the band named `band` at `place` seen through `ctx`.
    pub fn sky_at(&self, band: &str, ctx: &Context, place: &CatalogPlace) -> Result<SkyBrightness> {
        let b = self.get(band)?;
        sky_brightness(b, &self.twilight, &SkyGeometry::at(ctx, place))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nl_conversion_round_trips_and_is_a_magnitude_scale() {
        for m in [15.0, 18.3, 21.587, 23.0] {
            assert!((mag_from_nl(nl_from_mag(m)) - m).abs() < 1e-12);
        }
        // 0.92104 is 0.4 ln 10 to 5 digits: one magnitude is a factor 10^0.4.
        let r = nl_from_mag(20.0) / nl_from_mag(21.0);
        assert!((r - 10f64.powf(0.4)).abs() < 1e-4);
        // Krisciunas & Schaefer (1991): V = 21.587 is B_zen ≈ 79.0 nL, their
        // Mauna Kea dark sky (quoted from memory).
        assert!((nl_from_mag(21.587) - 79.0).abs() < 0.2);
    }

    #[test]
    fn ks_airmass_limits() {
        assert!((ks_airmass(0.0) - 1.0).abs() < 1e-15);
        assert!((ks_airmass(std::f64::consts::FRAC_PI_2) - 5.0).abs() < 1e-12);
    }

    #[test]
    fn moon_below_horizon_gives_nothing() {
        assert_eq!(ks_moon_nl(0.0, 0.5, 1.6, 0.3, 0.15), 0.0);
    }

    #[test]
    fn seen_and_total_alone_are_the_full_answers() {
        // SkyGeometry::at_seen with ctx.observe(place) is SkyGeometry::at,
        // and sky_mag_arcsec2 is sky_brightness's total, to the bit, in
        // every built-in band (optical and infrared), by day, twilight and
        // night, Moon up and down; below the horizon both refuse alike.
        use crate::astro::frames::Context;
        use crate::astro::time::parse_instant;
        let site = crate::astro::site::Site::new("t", -30.2, -70.7, 2200.0, "UTC".parse().unwrap())
            .unwrap();
        let bands = BandSet::builtin().unwrap();
        assert!(bands.bands.iter().any(|b| b.infrared.is_some()));
        let (mut up, mut down) = (0, 0);
        for when in [
            "2026-12-02T01:00:00Z",
            "2026-12-02T04:00:00Z",
            "2026-12-10T06:30:00Z",
            "2027-03-15T23:40:00Z",
            "2027-06-20T16:00:00Z",
        ] {
            let ctx = Context::exact(&site, parse_instant(when).unwrap()).unwrap();
            for ra in [0.0, 50.0, 100.0, 170.0, 260.0, 330.0] {
                for dec in [-85.0, -50.0, -30.0, 0.0, 25.0] {
                    let place = CatalogPlace::fixed_deg(ra, dec);
                    let g = SkyGeometry::at(&ctx, &place);
                    let seen = SkyGeometry::at_seen(&ctx, &ctx.observe(&place));
                    assert_eq!(format!("{g:?}"), format!("{seen:?}"));
                    for b in &bands.bands {
                        match sky_brightness(b, &bands.twilight, &g) {
                            Ok(full) => {
                                up += 1;
                                let alone = sky_mag_arcsec2(b, &bands.twilight, &g).unwrap();
                                assert_eq!(alone.to_bits(), full.sky_mag_arcsec2.to_bits());
                            }
                            Err(e) => {
                                down += 1;
                                let alone = sky_mag_arcsec2(b, &bands.twilight, &g).unwrap_err();
                                assert_eq!(alone.to_string(), e.to_string());
                            }
                        }
                    }
                }
            }
        }
        assert!(up > 0 && down > 0, "{up} {down}");
    }

    #[test]
    fn twilight_steps() {
        let m = BandSet::builtin().unwrap().twilight;
        assert!(twilight_v_mag_arcsec2((-19f64).to_radians(), &m).is_none());
        let a = twilight_v_mag_arcsec2((-12f64).to_radians(), &m).unwrap();
        let b = twilight_v_mag_arcsec2((-15f64).to_radians(), &m).unwrap();
        assert!((a - 18.0).abs() < 1e-9 && b > a);
        let c = twilight_v_mag_arcsec2(10f64.to_radians(), &m).unwrap();
        assert!((c - 12.0).abs() < 1e-9);
    }
}
