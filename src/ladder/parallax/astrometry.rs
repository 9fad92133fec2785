//! The error of one parallax epoch measured on CCD frames against reference
//! stars, term by term, and the size of differential chromatic refraction.
//!
//! Terms (docs/science.md, Parallax; each source beside its function):
//! - the target's centroid, FWHM / (2.35 SNR) ([`centroid_mas`]);
//! - the reference frame: each reference star's centroid averaged over the
//!   frame's stars ([`ReferenceFrame`], [`reference_frame_mas`]), the stars
//!   given per target or estimated from the Galactic star density
//!   ([`StarCounts`]);
//! - atmospheric image motion between the target and its reference stars,
//!   falling as the square root of the exposure time, growing with their
//!   separation and shrinking slowly with the aperture
//!   ([`image_motion_mas`], Han 1989; Lindegren 1980);
//! - the random part of refraction left after the colour correction, and a
//!   floor for everything else ([`EpochError`]).
//!
//! Differential chromatic refraction itself is not random: it is a
//! displacement toward the zenith that depends on the colours and the zenith
//! distance, computed by [`Dcr`] and treated by the selection as a
//! systematic (see `select.rs`).

use crate::astro::site::Site;
use crate::error::{Result, RungError};
use serde::Serialize;

/// Separation at which Han (1989) quotes the image-motion constant, arcsec.
pub const HAN_SEPARATION_ARCSEC: f64 = 600.0;

/// Aperture of the telescope Han (1989) measured with (the Allegheny
/// Observatory's 0.76 m Thaw refractor and its multichannel astrometric
/// photometer; Gatewood 1987, AJ 94, 213), metres.
pub const HAN_APERTURE_M: f64 = 0.76;

/// A Gaussian image's σ is its FWHM / 2.3548.
const FWHM_PER_SIGMA: f64 = 2.35;

/// Centroid error of a star image, one coordinate, mas: FWHM / (2.35 SNR),
/// the photon-limited error of a Gaussian image's centre (its σ divided by
/// the SNR; common practice, docs/science.md, Parallax).
pub fn centroid_mas(fwhm_arcsec: f64, snr: f64) -> Result<f64> {
    if !(fwhm_arcsec.is_finite() && fwhm_arcsec > 0.0) {
        return Err(RungError::invalid(
            "seeing FWHM",
            format!("{fwhm_arcsec} arcsec must be positive"),
        ));
    }
    if !(snr.is_finite() && snr > 0.0) {
        return Err(RungError::invalid(
            "epoch SNR",
            format!("{snr} must be positive"),
        ));
    }
    Ok(1000.0 * fwhm_arcsec / (FWHM_PER_SIGMA * snr))
}

/// Differential atmospheric image motion between two stars, one coordinate,
/// mas, averaged over a total exposure of `exptime_s` seconds:
///
/// σ = C (θ / 600″)^(1/3) (D / 0.76 m)^(−1/6) (t / 1 s)^(−1/2)
///
/// Han (1989, AJ 97, 607) measured σ = 0.140″ (S/600″)^0.33 t^−0.5 for star
/// pairs 330″ to 1260″ apart at the Allegheny Observatory, the form
/// Lindegren (1980, A&A 89, 41) derived for Kolmogorov turbulence; Han &
/// Gatewood (1995, PASP; quoted from the abstract of a later Allegheny study) found the constant C to be 0.054″ on Mauna
/// Kea. C is a property of the site (`image_motion_arcsec` in
/// `config/parallax.toml`). The aperture factor D^(−1/6) is Lindegren's for
/// separations large against D/h (h the height of the turbulence; about
/// 20″ for a 1 m telescope), quoted from memory. `separation_arcsec` is the
/// typical target–reference separation.
pub fn image_motion_mas(
    c_arcsec: f64,
    separation_arcsec: f64,
    aperture_m: f64,
    exptime_s: f64,
) -> f64 {
    1000.0
        * c_arcsec
        * (separation_arcsec / HAN_SEPARATION_ARCSEC).cbrt()
        * (aperture_m / HAN_APERTURE_M).powf(-1.0 / 6.0)
        / exptime_s.sqrt()
}

/// The reference frame's error at the target, one coordinate, mas: each
/// reference star's centroid error `ref_centroid_mas` averaged over `count`
/// stars, σ / √N. This is the error of a linear plate solution's prediction
/// at the centroid of its stars (the variance of a least-squares mean; a
/// target near the middle of its frame, common practice).
pub fn reference_frame_mas(ref_centroid_mas: f64, count: f64) -> f64 {
    ref_centroid_mas / count.max(1.0).sqrt()
}

/// Star counts: stars per square degree brighter than a magnitude, at a
/// Galactic latitude. The project's own approximation, with its numbers
/// quoted from memory: at the Galactic pole about 1000 stars per square
/// degree brighter than V = 20, the count growing by about 0.25 dex a
/// magnitude at these magnitudes (Bahcall & Soneira 1980, ApJS 44, 73, model
/// counts toward the pole), and a disc seen as a slab, so that the count
/// grows as 1 / sin |b| toward the plane (capped at `min_latitude_deg`, below
/// which dust and crowding break the slab picture). Good to a factor of two
/// or three: use it only when the reference stars are not given.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StarCounts {
    /// Stars per square degree brighter than magnitude 20 at the Galactic pole.
    pub pole_per_deg2_at_20: f64,
    /// Growth of the count, dex per magnitude.
    pub slope_per_mag: f64,
    /// Latitude below which the count stops growing, degrees.
    pub min_latitude_deg: f64,
}

impl StarCounts {
    /// Stars per square degree brighter than `mag` at Galactic latitude `b_deg`.
    pub fn brighter_than_per_deg2(&self, mag: f64, b_deg: f64) -> f64 {
        let b = b_deg
            .abs()
            .max(self.min_latitude_deg)
            .min(90.0)
            .to_radians();
        self.pole_per_deg2_at_20 * 10f64.powf(self.slope_per_mag * (mag - 20.0)) / b.sin()
    }
}

/// Galactic latitude of an ICRS direction, degrees (SOFA `icrs2g`).
pub fn galactic_latitude_deg(ra_rad: f64, dec_rad: f64) -> f64 {
    sofars::coords::icrs2g(ra_rad, dec_rad).1.to_degrees()
}

/// Where a reference-frame value came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Source {
    /// Given with the target (a targets-file column).
    Given,
    /// Estimated by rung (star counts, or the method's default).
    Estimated,
}

/// The reference stars a target's positions are measured against.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReferenceFrame {
    /// Number of reference stars.
    pub count: f64,
    /// Where the count came from.
    pub count_source: Source,
    /// Their typical magnitude in the target's band.
    pub mag: f64,
    /// Where the magnitude came from.
    pub mag_source: Source,
    /// Their mean V−I colour, mag.
    pub color_vi_mag: f64,
    /// Where the colour came from.
    pub color_source: Source,
    /// Typical target–reference separation, arcsec: two thirds of the field
    /// radius (the mean distance from the centre of a uniformly filled disc).
    pub separation_arcsec: f64,
    /// Galactic latitude of the field, degrees.
    pub galactic_lat_deg: f64,
}

/// What [`estimate_reference_stars`] needs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrameRule {
    /// Radius of the field the reference stars are taken from, arcmin.
    pub radius_arcmin: f64,
    /// Magnitudes taken as reference stars, relative to the target
    /// (brighter limit, fainter limit), e.g. (−3, +1).
    pub mag_window: (f64, f64),
    /// The fainter limit is at least this magnitude.
    pub faintest_mag: f64,
    /// Most reference stars a reduction uses.
    pub max_stars: f64,
    /// The star counts.
    pub counts: StarCounts,
}

/// Reference stars estimated from the star counts: the stars of the field
/// (a disc of `radius_arcmin`) within the magnitude window around the
/// target's magnitude (its fainter end at least `faintest_mag`), the
/// brightest `max_stars` of them when there are more;
/// their typical magnitude is the mean of the counts' exponential
/// distribution over the magnitudes taken. Returns (count, mean magnitude).
pub fn estimate_reference_stars(target_mag: f64, b_deg: f64, rule: &FrameRule) -> (f64, f64) {
    let area_deg2 = std::f64::consts::PI * (rule.radius_arcmin / 60.0).powi(2);
    let n = |m: f64| rule.counts.brighter_than_per_deg2(m, b_deg) * area_deg2;
    let lo = target_mag + rule.mag_window.0;
    let mut hi = (target_mag + rule.mag_window.1).max(rule.faintest_mag);
    let mut count = n(hi) - n(lo);
    if count > rule.max_stars {
        // The brightest max_stars: N(<hi) = N(<lo) + max.
        let k = rule.slope_per_mag_ln();
        hi = lo + ((n(lo) + rule.max_stars) / n(lo)).ln() / k;
        count = rule.max_stars;
    }
    // Mean of a density ∝ e^{k m} on [lo, hi].
    let k = rule.slope_per_mag_ln();
    let w = hi - lo;
    let mean = if w * k > 1e-6 {
        hi - 1.0 / k + w / ((k * w).exp() - 1.0)
    } else {
        0.5 * (lo + hi)
    };
    (count.max(0.0), mean)
}

impl FrameRule {
    fn slope_per_mag_ln(&self) -> f64 {
        self.counts.slope_per_mag * std::f64::consts::LN_10
    }
}

/// The error of one epoch, one coordinate, by term (mas); the terms are
/// independent and add in quadrature to `total_mas`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct EpochError {
    /// The target's centroid, FWHM / (2.35 SNR).
    pub centroid_mas: f64,
    /// The reference frame.
    pub reference_mas: f64,
    /// Atmospheric image motion over the epoch's exposure.
    pub image_motion_mas: f64,
    /// The random part of chromatic refraction left after its correction.
    pub refraction_mas: f64,
    /// The floor (detector, optics, centring algorithm).
    pub floor_mas: f64,
    /// All of them in quadrature.
    pub total_mas: f64,
}

impl EpochError {
    /// The terms, with their quadrature sum.
    pub fn new(
        centroid_mas: f64,
        reference_mas: f64,
        image_motion_mas: f64,
        refraction_mas: f64,
        floor_mas: f64,
    ) -> Self {
        let total_mas = [
            centroid_mas,
            reference_mas,
            image_motion_mas,
            refraction_mas,
            floor_mas,
        ]
        .iter()
        .map(|x| x * x)
        .sum::<f64>()
        .sqrt();
        EpochError {
            centroid_mas,
            reference_mas,
            image_motion_mas,
            refraction_mas,
            floor_mas,
            total_mas,
        }
    }
}

/// The refraction constant A (the coefficient of tan z in the refraction
/// A tan z + B tan³ z), mas, at a wavelength in Å, for the site's pressure,
/// temperature and humidity: SOFA `refco`.
pub fn refraction_a_mas(site: &Site, wavelength_angstrom: f64) -> f64 {
    let (a, _) = sofars::astro::refco(
        site.pressure_hpa(),
        site.temperature_c,
        site.humidity,
        wavelength_angstrom * 1e-4,
    );
    a * super::MAS_PER_RAD
}

/// Effective (photon-weighted mean) wavelength of a star of colour V−I seen
/// through a band of effective wavelength `lambda0` and width `width` (Å).
/// The project's own approximation: the band as a top hat (variance
/// width²/12) and the star's spectrum as a power law f_λ ∝ λ^−α across it,
/// α set by the V−I colour between the V and I effective wavelengths
/// `lambda_v`, `lambda_i`; to first order the mean shifts by
/// (1 − α) width² / (12 λ0), so it moves redward by
/// width² / (12 λ0 · 2.5 log10(λ_I/λ_V)) per magnitude of V−I. Only the
/// difference between two colours is used, so the colour at which the
/// effective wavelength equals `lambda0` (taken as V−I = 0) cancels.
pub fn effective_wavelength_angstrom(
    lambda0: f64,
    width: f64,
    color_vi_mag: f64,
    lambda_v: f64,
    lambda_i: f64,
) -> f64 {
    let per_mag = width * width / (12.0 * lambda0 * 2.5 * (lambda_i / lambda_v).log10());
    lambda0 + per_mag * color_vi_mag
}

/// Differential chromatic refraction between a target and its reference
/// frame: the target's displacement toward the zenith relative to the
/// frame, `mas_per_tanz` × tan z (positive when the target is bluer, since
/// refraction falls with wavelength). On the sky it points along the
/// parallactic angle q: Δα cos δ = D sin q, Δδ = D cos q.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Dcr {
    /// Band.
    #[serde(skip)]
    pub band_lambda_angstrom: f64,
    /// Effective wavelength of the target, Å.
    pub target_lambda_angstrom: f64,
    /// Effective wavelength of the reference frame, Å.
    pub reference_lambda_angstrom: f64,
    /// Target minus reference refraction per unit tan z, mas.
    pub mas_per_tanz: f64,
}

impl Dcr {
    /// DCR for a band (effective wavelength and width, Å), the V and I
    /// effective wavelengths (Å) that define the colour, and the colours of
    /// target and frame, at the site's weather.
    pub fn new(
        site: &Site,
        passband: (f64, f64),
        v_i: (f64, f64),
        target_color_vi: f64,
        reference_color_vi: f64,
    ) -> Self {
        let (l0, w) = passband;
        let lt = effective_wavelength_angstrom(l0, w, target_color_vi, v_i.0, v_i.1);
        let lr = effective_wavelength_angstrom(l0, w, reference_color_vi, v_i.0, v_i.1);
        Dcr {
            band_lambda_angstrom: l0,
            target_lambda_angstrom: lt,
            reference_lambda_angstrom: lr,
            mas_per_tanz: refraction_a_mas(site, lt) - refraction_a_mas(site, lr),
        }
    }

    /// The displacement (Δα cos δ, Δδ), mas, at zenith distance z (its
    /// tangent) and parallactic angle q (radians).
    pub fn displacement_mas(&self, tan_z: f64, q_rad: f64) -> (f64, f64) {
        let d = self.mas_per_tanz * tan_z;
        (d * q_rad.sin(), d * q_rad.cos())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn image_motion_follows_han_1989() {
        // Han (1989): 0.140″ at 600″ and 1 s on the 0.76 m refractor.
        assert!((image_motion_mas(0.140, 600.0, 0.76, 1.0) - 140.0).abs() < 1e-9);
        // t^−1/2, S^1/3, D^−1/6.
        let a = image_motion_mas(0.140, 300.0, 1.0, 100.0);
        assert!((image_motion_mas(0.140, 300.0, 1.0, 400.0) / a - 0.5).abs() < 1e-12);
        assert!((image_motion_mas(0.140, 2400.0, 1.0, 100.0) / a - 2.0).abs() < 1e-12);
        assert!((image_motion_mas(0.140, 300.0, 64.0, 100.0) / a - 0.5).abs() < 1e-12);
    }

    #[test]
    fn estimated_frame_is_capped_and_brighter_near_the_cap() {
        let rule = FrameRule {
            radius_arcmin: 5.0,
            mag_window: (-3.0, 1.0),
            faintest_mag: 0.0,
            max_stars: 15.0,
            counts: StarCounts {
                pole_per_deg2_at_20: 1000.0,
                slope_per_mag: 0.25,
                min_latitude_deg: 10.0,
            },
        };
        let (n_pole, m_pole) = estimate_reference_stars(17.0, 90.0, &rule);
        let (n_plane, m_plane) = estimate_reference_stars(17.0, 5.0, &rule);
        assert!(n_pole > 3.0 && n_pole < 15.0, "{n_pole}");
        assert_eq!(n_plane, 15.0);
        assert!(
            m_pole > 14.0 && m_pole < 18.0 && m_plane < m_pole,
            "{m_pole} {m_plane}"
        );
    }
}
