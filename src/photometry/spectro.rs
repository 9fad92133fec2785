//! A long-slit spectrograph on the telescope: the exposure a low-resolution
//! spectrum needs for a signal-to-noise per resolution element, with the light
//! the slit loses in the seeing (docs/science.md, Thermonuclear supernovae,
//! classification). The profile ([`Spectrograph`]) is the optional
//! `[instrument.spectrograph]` table of an instrument in config/instruments.toml.

use crate::error::{Result, RungError};
use crate::photometry::ccd::erf;
use crate::photometry::instrument::Spectrograph;
use crate::sky::Band;
use serde::Serialize;

/// FWHM of a Gaussian in units of its σ: 2 sqrt(2 ln 2).
const FWHM_PER_SIGMA: f64 = 2.354_820_045;

/// A spectrum's exposure and what goes into it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SpectrumBudget {
    /// Total exposure, s.
    pub exptime_s: f64,
    /// Number of sub-exposures.
    pub n_exposures: u32,
    /// Signal-to-noise per resolution element reached.
    pub snr_per_resolution_element: f64,
    /// Width of a resolution element, Å.
    pub resolution_element_angstrom: f64,
    /// Fraction of the star's light through the slit (and the extraction).
    pub slit_transmission: f64,
    /// Star electrons per second in one resolution element.
    pub star_e_per_s: f64,
    /// Sky electrons per second in the extraction of one resolution element.
    pub sky_e_per_s: f64,
    /// Pixels in the extraction of one resolution element.
    pub pixels: f64,
    /// Time of the visit: acquisition, exposures and readouts, s.
    pub visit_s: f64,
}

impl Spectrograph {
    /// Fraction of a Gaussian image of FWHM `seeing_fwhm_arcsec` that passes a
    /// slit of the profile's width centred on it, times the fraction inside
    /// the extraction length along the slit: erf(w / (2√2 σ)) · erf(L / (2√2 σ))
    /// (a Gaussian's integral over a strip; common practice for slit losses).
    pub fn slit_transmission(&self, seeing_fwhm_arcsec: f64) -> f64 {
        let sigma = seeing_fwhm_arcsec / FWHM_PER_SIGMA;
        let s2 = 2.0 * std::f64::consts::SQRT_2 * sigma;
        let l = self.extraction_fwhm * seeing_fwhm_arcsec;
        erf(self.slit_width_arcsec / s2) * erf(l / s2)
    }

    /// Exposure for a spectrum reaching `snr` per resolution element at
    /// `wavelength_angstrom` on a point source of magnitude `mag` in `band`
    /// (whose photon zero point stands in for the continuum there), through
    /// `airmass` (extinction of the band), under a sky of `sky_mag_arcsec2` in
    /// the band, with the seeing FWHM, on a telescope of `area_cm2`. The CCD
    /// equation per resolution element (Howell, *Handbook of CCD Astronomy*):
    /// SNR = N t / sqrt(N t + S t + n_pix (D t + n_sub R²)), solved for t and
    /// split into sub-exposures no longer than `max_sub_exptime_s`.
    #[allow(clippy::too_many_arguments)]
    pub fn exposure(
        &self,
        band: &Band,
        mag: f64,
        airmass: f64,
        sky_mag_arcsec2: f64,
        seeing_fwhm_arcsec: f64,
        area_cm2: f64,
        snr: f64,
        wavelength_angstrom: f64,
    ) -> Result<SpectrumBudget> {
        if !(snr.is_finite() && snr > 0.0) {
            return Err(RungError::invalid(
                "snr",
                format!("{snr} is not a positive signal-to-noise"),
            ));
        }
        if !(wavelength_angstrom.is_finite() && wavelength_angstrom > 0.0) {
            return Err(RungError::invalid(
                "wavelength",
                format!("{wavelength_angstrom} Å is not a wavelength"),
            ));
        }
        let dl = wavelength_angstrom / self.resolution;
        let ext = crate::sky::extinction_mag(band, airmass);
        let per_aa = band.photon_zero_per_s_cm2_angstrom() * area_cm2 * self.throughput;
        let trans = self.slit_transmission(seeing_fwhm_arcsec);
        let star = per_aa * dl * 10f64.powf(-0.4 * (mag + ext)) * trans;
        let length = self.extraction_fwhm * seeing_fwhm_arcsec;
        let sky =
            per_aa * dl * 10f64.powf(-0.4 * sky_mag_arcsec2) * self.slit_width_arcsec * length;
        let pixels = (dl / self.dispersion_angstrom_per_pix).max(1.0)
            * (length / self.spatial_scale_arcsec).max(1.0);
        let r2 = self.read_noise_e * self.read_noise_e;
        let solve = |n_sub: f64| {
            let b = snr * snr * (star + sky + pixels * self.dark_e_per_pix_s);
            let c = snr * snr * pixels * n_sub * r2;
            (b + (b * b + 4.0 * star * star * c).sqrt()) / (2.0 * star * star)
        };
        let mut t = solve(1.0);
        let mut n = (t / self.max_sub_exptime_s).ceil().max(1.0);
        for _ in 0..4 {
            t = solve(n);
            let n2 = (t / self.max_sub_exptime_s).ceil().max(1.0);
            if n2 == n {
                break;
            }
            n = n2;
        }
        if !t.is_finite() {
            return Err(RungError::invalid(
                "magnitude",
                format!(
                    "{} gives no spectrum with {}",
                    crate::bounds::show_mag(mag),
                    self.name
                ),
            ));
        }
        let got =
            star * t / (star * t + sky * t + pixels * (self.dark_e_per_pix_s * t + n * r2)).sqrt();
        Ok(SpectrumBudget {
            exptime_s: t,
            n_exposures: n as u32,
            snr_per_resolution_element: got,
            resolution_element_angstrom: dl,
            slit_transmission: trans,
            star_e_per_s: star,
            sky_e_per_s: sky,
            pixels,
            visit_s: self.acquisition_s + t + n * self.readout_s,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo() -> Spectrograph {
        Spectrograph {
            name: "test".into(),
            description: String::new(),
            resolution: 600.0,
            throughput: 0.15,
            slit_width_arcsec: 1.5,
            spatial_scale_arcsec: 0.5,
            dispersion_angstrom_per_pix: 3.3,
            extraction_fwhm: 2.0,
            read_noise_e: 4.0,
            dark_e_per_pix_s: 0.001,
            readout_s: 40.0,
            acquisition_s: 300.0,
            max_sub_exptime_s: 1200.0,
        }
    }

    #[test]
    fn slit_losses_follow_the_gaussian_strip() {
        let s = demo();
        // A slit as wide as the FWHM passes erf(sqrt(ln 2)) = 0.7610 of a
        // Gaussian image across it (a property of the Gaussian; its FWHM
        // spans ±sqrt(2 ln 2) σ); the extraction of 2 FWHM passes 0.9815.
        let t = s.slit_transmission(1.5);
        let across = 0.761_0;
        let along = 0.981_5;
        assert!((t - across * along).abs() < 2e-4, "{t}");
        // Wider seeing, more light lost.
        assert!(s.slit_transmission(3.0) < t);
    }
}
