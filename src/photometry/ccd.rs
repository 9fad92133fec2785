//! The CCD equation and its inverse problems, for one star under given
//! conditions (no astronomy here: the sky and airmass come in as numbers).
//!
//! Signal-to-noise, Merline & Howell (1995, Experimental Astronomy 6, 163) as
//! given in Howell, *Handbook of CCD Astronomy* (2nd ed., 2006, ch. 4; references
//! quoted from memory):
//!
//! SNR = N* / sqrt(N* + n_pix (1 + n_pix/n_B) (N_S + N_D + N_R² + G² σ_f²) + σ_sc² N*²)
//!
//! with N* the star's electrons inside the aperture, n_pix the aperture's
//! pixels, n_B the sky-annulus pixels, N_S and N_D the sky and dark electrons
//! per pixel, N_R the read noise per pixel and exposure, G σ_f the digitization
//! noise (σ_f ≈ 0.289 ADU, Merline & Howell), and σ_sc the fractional
//! scintillation of Young (1967) added in quadrature. With `n` sub-exposures
//! the read and digitization terms count `n` times.

use crate::error::{Result, RungError};
use crate::photometry::instrument::Instrument;
use crate::sky::Band;
use serde::Serialize;

/// Digitization noise of an ideal converter, ADU rms: 1/√12 ≈ 0.289
/// (Merline & Howell 1995).
pub const DIGITIZATION_ADU: f64 = 0.288_675_134_594_812_9;

/// FWHM of a Gaussian in units of σ: 2 √(2 ln 2).
pub const FWHM_PER_SIGMA: f64 = 2.354_820_045_030_949;

/// Radius of the aperture that maximizes the SNR of a background-limited
/// Gaussian star, in units of the FWHM: r = σ √(2u) with u the root of
/// e^{−u}(2u + 1) = 1 (u ≈ 1.2564), i.e. 0.673 FWHM enclosing 71.5 % of the
/// flux (derived in tests/photometry_ccd.rs). Used as the starting aperture;
/// the aperture actually used is optimized for each case.
pub const BACKGROUND_LIMITED_RADIUS_FWHM: f64 = 0.673;

/// Young (1967, AJ 72, 747; reference quoted from memory) scintillation, as a fraction of the flux:
/// σ = 0.09 D^(−2/3) X^1.75 exp(−h/8000 m) (2t)^(−1/2), D the aperture in
/// cm, X the airmass, h the site's height in m, t the exposure in s. An
/// average-conditions estimate; actual scintillation varies by a factor ~1.5
/// from night to night.
pub fn scintillation_young(aperture_cm: f64, airmass: f64, elev_m: f64, exptime_s: f64) -> f64 {
    0.09 * aperture_cm.powf(-2.0 / 3.0) * airmass.powf(1.75) * (-elev_m / 8000.0).exp()
        / (2.0 * exptime_s).sqrt()
}

/// Error function, Abramowitz & Stegun (1964) 7.1.26, |error| < 1.5·10⁻⁷.
pub fn erf(x: f64) -> f64 {
    let s = x.signum();
    let x = x.abs();
    let t = 1.0 / (1.0 + 0.327_591_1 * x);
    let y = 1.0
        - (((((1.061_405_429 * t - 1.453_152_027) * t) + 1.421_413_741) * t - 0.284_496_736) * t
            + 0.254_829_592)
            * t
            * (-x * x).exp();
    s * y
}

/// Observing conditions for one star at one instant.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Conditions {
    /// Airmass of the star (Kasten–Young), for extinction and scintillation.
    pub airmass: f64,
    /// Sky brightness at the star in the band, mag arcsec⁻².
    pub sky_mag_arcsec2: f64,
    /// Seeing FWHM, arcsec.
    pub seeing_fwhm_arcsec: f64,
    /// Site elevation, m (for scintillation).
    pub site_elev_m: f64,
}

/// Count rates and detector numbers for one star, one band, one set of conditions.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Rates {
    /// Star electrons per second in the whole PSF (after extinction).
    pub star_e_per_s: f64,
    /// Sky electrons per pixel per second.
    pub sky_e_per_pix_s: f64,
    /// Dark electrons per pixel per second.
    pub dark_e_per_pix_s: f64,
    /// Read noise plus digitization noise in quadrature, electrons rms per pixel.
    pub read_e: f64,
    /// Young scintillation × √t (fraction √s).
    pub scint_frac_sqrt_s: f64,
    /// PSF σ, pixels.
    pub sigma_pix: f64,
    /// Sky-annulus pixels n_B.
    pub background_pixels: f64,
    /// Fraction of the star's light in the central pixel (star centred on it).
    pub peak_fraction: f64,
    /// Largest aperture radius allowed (inside the sky annulus), pixels.
    pub max_radius_pix: f64,
    /// Atmospheric extinction applied, mag.
    pub extinction_mag: f64,
}

/// A computed exposure: the SNR and every term of the noise budget.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseBudget {
    /// Signal-to-noise ratio.
    pub snr: f64,
    /// Total exposure, s.
    pub exptime_s: f64,
    /// Number of sub-exposures.
    pub n_exposures: u32,
    /// Length of each sub-exposure, s.
    pub sub_exptime_s: f64,
    /// Star electrons in the aperture, summed over the sub-exposures.
    pub star_electrons: f64,
    /// Sky electrons per pixel, summed over the sub-exposures.
    pub sky_electrons_per_pixel: f64,
    /// Dark electrons per pixel, summed over the sub-exposures.
    pub dark_electrons_per_pixel: f64,
    /// Aperture radius, pixels.
    pub aperture_radius_pix: f64,
    /// Pixels in the aperture (π r²).
    pub aperture_pixels: f64,
    /// Pixels in the sky annulus.
    pub background_pixels: f64,
    /// Fraction of the star's light inside the aperture.
    pub encircled_fraction: f64,
    /// Photon noise of the star, electrons.
    pub noise_star_e: f64,
    /// Sky noise (with the sky-estimate factor 1 + n_pix/n_B), electrons.
    pub noise_sky_e: f64,
    /// Dark-current noise, electrons.
    pub noise_dark_e: f64,
    /// Read and digitization noise, electrons.
    pub noise_read_e: f64,
    /// Scintillation noise, electrons.
    pub noise_scintillation_e: f64,
    /// Total noise, electrons.
    pub noise_total_e: f64,
    /// Fractional scintillation over the total exposure.
    pub scintillation_frac: f64,
    /// Star + sky + dark electrons in the brightest pixel of one sub-exposure.
    pub peak_pixel_electrons: f64,
    /// Saturation level of a pixel, electrons.
    pub saturation_electrons: f64,
    /// Whether the peak pixel passes the saturation level.
    pub saturated: bool,
}

/// One exposure of one star's [`Rates`] (its time and number of
/// sub-exposures): what [`Rates::evaluate`] works out the same way at every
/// aperture radius (2σ², the sky and dark electrons per pixel, the
/// scintillation fraction), once, for `evaluate` ([`Exposure::terms`]) and
/// for the search of the best aperture radius ([`Exposure::best_radius_pix`]).
struct Exposure {
    star_e_per_s: f64,
    two_sigma2: f64,
    background_pixels: f64,
    exptime_s: f64,
    sky_e: f64,
    dark_e: f64,
    n_f64: f64,
    read_e: f64,
    scint_frac: f64,
    max_radius_pix: f64,
}

/// The ends of the search of [`Exposure::best_radius_pix`], which depend on
/// the PSF's σ and the largest radius alone (the same for every exposure of
/// one instrument and seeing): the radii, u = r²/2σ² and e^{−u} at each end.
#[derive(Debug, Clone, Copy)]
pub struct RadiusEnds {
    two_sigma2: f64,
    max_radius_pix: f64,
    lo_r: f64,
    hi_r: f64,
    lo_u: f64,
    hi_u: f64,
    e_lo: f64,
    e_hi: f64,
}

impl RadiusEnds {
    fn of(x: &Exposure) -> Self {
        let lo_r = 0.5f64.min(x.max_radius_pix);
        let hi_r = x.max_radius_pix;
        let (lo_u, hi_u) = (lo_r * lo_r / x.two_sigma2, hi_r * hi_r / x.two_sigma2);
        RadiusEnds {
            two_sigma2: x.two_sigma2,
            max_radius_pix: x.max_radius_pix,
            lo_r,
            hi_r,
            lo_u,
            hi_u,
            e_lo: (-lo_u).exp(),
            e_hi: (-hi_u).exp(),
        }
    }

    /// Whether these are the ends of `x`'s search (the same bits of σ and
    /// of the largest radius).
    fn fit(&self, x: &Exposure) -> bool {
        self.two_sigma2.to_bits() == x.two_sigma2.to_bits()
            && self.max_radius_pix.to_bits() == x.max_radius_pix.to_bits()
    }
}

/// The noise terms of one exposure at one aperture radius ([`Exposure::terms`]).
struct Terms {
    frac: f64,
    npix: f64,
    nstar: f64,
    v_sky: f64,
    v_dark: f64,
    v_read: f64,
    v_sc: f64,
    total: f64,
}

impl Exposure {
    fn of(&(r, exptime_s, n): &(&Rates, f64, u32)) -> Exposure {
        let t = exptime_s;
        Exposure {
            star_e_per_s: r.star_e_per_s,
            two_sigma2: 2.0 * r.sigma_pix * r.sigma_pix,
            background_pixels: r.background_pixels,
            exptime_s: t,
            sky_e: r.sky_e_per_pix_s * t,
            dark_e: r.dark_e_per_pix_s * t,
            n_f64: n.max(1) as f64,
            read_e: r.read_e,
            scint_frac: r.scint_frac_sqrt_s / t.sqrt(),
            max_radius_pix: r.max_radius_pix,
        }
    }

    /// The star's electrons and each noise variance in an aperture of
    /// `radius_pix` (Merline & Howell 1995's CCD equation, as
    /// [`Rates::evaluate`] documents it).
    #[inline(always)]
    fn terms(&self, radius_pix: f64) -> Terms {
        let frac = 1.0 - (-radius_pix * radius_pix / self.two_sigma2).exp();
        let npix = std::f64::consts::PI * radius_pix * radius_pix;
        let f = npix * (1.0 + npix / self.background_pixels);
        let nstar = self.star_e_per_s * frac * self.exptime_s;
        let v_sky = f * self.sky_e;
        let v_dark = f * self.dark_e;
        let v_read = f * self.n_f64 * self.read_e * self.read_e;
        let v_sc = (self.scint_frac * nstar).powi(2);
        let total = (nstar + v_sky + v_dark + v_read + v_sc).sqrt();
        Terms {
            frac,
            npix,
            nstar,
            v_sky,
            v_dark,
            v_read,
            v_sc,
            total,
        }
    }

    /// The aperture radius (pixels) in [min(0.5, R), R] (R the largest
    /// radius) that maximizes the SNR of [`Self::terms`].
    ///
    /// With u = r²/2σ², e = e^{−u}, the star's electrons N = A(1 − e)
    /// (A = S t), the aperture's weighted pixels f = p u (1 + p u/n_B)
    /// (p = 2πσ²) and B = sky + dark + n R² per pixel, the variance is
    /// V = N + f B + c N² (c the scintillation fraction squared), so
    /// 1/SNR² = 1/N + f B/N² + c: the scintillation does not move the
    /// optimum. d(SNR²)/du has the sign of
    /// G(u) = A e (1 − e) + B (2 e f − (1 − e) f′),
    /// positive at small u (the SNR grows with the aperture) and negative
    /// once the wings hold little light. Its root is found by Newton steps
    /// on G (with its analytic derivative) kept inside a bracket that
    /// shrinks at every step, a bisection taking over when a step would
    /// leave it or shrink it too little: a handful of exponentials instead
    /// of a golden-section search's sixty-odd SNRs. When G does not change
    /// sign the SNR is monotonic over the interval and the answer is the
    /// end it grows towards (the largest radius when the SNR is zero
    /// throughout, as with no star light, or grows throughout, as with
    /// no sky, dark or read noise).
    ///
    /// The SNR at the optimum is flat, so the SNR there agrees with a
    /// golden-section search's to rounding (tested to 10⁻¹² relative on
    /// thousands of jobs) while the radius itself may differ from such a
    /// search's in its last digits.
    fn best_radius_pix(&self) -> f64 {
        self.best_radius_pix_in(&RadiusEnds::of(self))
    }

    /// [`Self::best_radius_pix`] with the search's ends worked out
    /// ([`RadiusEnds::of`] of an exposure with the same σ and largest
    /// radius as this one): the same numbers.
    fn best_radius_pix_in(&self, ends: &RadiusEnds) -> f64 {
        let RadiusEnds {
            lo_r,
            hi_r,
            lo_u: lo,
            hi_u: hi,
            e_lo,
            e_hi,
            ..
        } = *ends;
        let a = self.star_e_per_s * self.exptime_s;
        let b = self.sky_e + self.dark_e + self.n_f64 * self.read_e * self.read_e;
        let p = std::f64::consts::PI * self.two_sigma2;
        let k = p * p / self.background_pixels;
        // Not an interval, or nothing to weigh: no star light (the SNR is
        // zero at every radius) or no noise but the star's own (the SNR
        // grows with the radius), or numbers that are not finite.
        if !(lo_r < hi_r && hi_r.is_finite()) {
            return 0.5 * (lo_r + hi_r);
        }
        let weighable = a > 0.0
            && a.is_finite()
            && b > 0.0
            && b.is_finite()
            && p > 0.0
            && p.is_finite()
            && k >= 0.0
            && k.is_finite();
        if !weighable {
            return hi_r;
        }
        // G and dG/du at u, e = e^{−u}.
        let g_at = |u: f64, e: f64| {
            let one_e = 1.0 - e;
            let f = u * (p + k * u);
            let f1 = p + 2.0 * k * u;
            let f2 = 2.0 * k;
            let gu = a * e * one_e + b * (2.0 * e * f - one_e * f1);
            let du = a * e * (2.0 * e - 1.0) + b * (e * (f1 - 2.0 * f) - one_e * f2);
            (gu, du)
        };
        let g = |u: f64| g_at(u, (-u).exp());
        let (mut lo, mut hi) = (lo, hi);
        let (g_hi, _) = g_at(hi, e_hi);
        if g_hi >= 0.0 || g_hi.is_nan() {
            return hi_r;
        }
        let (g_lo, _) = g_at(lo, e_lo);
        if g_lo <= 0.0 || g_lo.is_nan() {
            return lo_r;
        }
        // Start at the background-limited optimum (u ≈ 1.2564) or, for a
        // star bright enough that e ≈ B p/A there, further out.
        let mut u = 1.256_431_208_626_17f64
            .max((a / (b * p)).ln())
            .clamp(lo, hi);
        let (mut gu, mut du) = g(u);
        for _ in 0..200 {
            if gu > 0.0 {
                lo = u;
            } else if gu < 0.0 {
                hi = u;
            } else {
                break;
            }
            let newton = u - gu / du;
            let width = hi - lo;
            let next = if (lo..=hi).contains(&newton) && (newton - u).abs() < 0.5 * width {
                newton
            } else {
                0.5 * (lo + hi)
            };
            let step = (next - u).abs();
            u = next;
            if step <= 1e-10 * u || width <= 1e-13 * u {
                break;
            }
            (gu, du) = g(u);
        }
        (u * self.two_sigma2).sqrt().clamp(lo_r, hi_r)
    }
}

/// Refuse a magnitude outside [`bounds::MAG`](crate::bounds::MAG).
pub fn check_mag(mag: f64) -> Result<()> {
    crate::bounds::MAG.check_as("magnitude", mag).map(|_| ())
}

/// Refuse an exposure time outside [`bounds::EXPTIME_S`](crate::bounds::EXPTIME_S).
pub fn check_exptime(exptime_s: f64) -> Result<()> {
    crate::bounds::EXPTIME_S
        .check_as("exposure time", exptime_s)
        .map(|_| ())
}

/// Refuse a signal-to-noise outside [`bounds::SNR`](crate::bounds::SNR).
pub fn check_snr(snr: f64) -> Result<()> {
    crate::bounds::SNR
        .check_as("signal-to-noise", snr)
        .map(|_| ())
}

fn check_conditions(c: &Conditions) -> Result<()> {
    if !c.airmass.is_finite() || c.airmass < 1.0 {
        return Err(RungError::invalid(
            "airmass",
            format!("{} must be a number ≥ 1", c.airmass),
        ));
    }
    if !c.sky_mag_arcsec2.is_finite() {
        return Err(RungError::invalid(
            "sky brightness",
            format!("{} mag/arcsec² is not a number", c.sky_mag_arcsec2),
        ));
    }
    if !c.seeing_fwhm_arcsec.is_finite() || c.seeing_fwhm_arcsec <= 0.0 {
        return Err(RungError::invalid(
            "seeing",
            format!("{} arcsec must be a positive FWHM", c.seeing_fwhm_arcsec),
        ));
    }
    if !c.site_elev_m.is_finite() {
        return Err(RungError::invalid("site elevation", "not a number"));
    }
    Ok(())
}

/// Count rates of a star of magnitude `mag` (above the atmosphere) in `band`
/// through `inst` under `cond`: N*/t = photons(m + kX) × area × throughput,
/// sky/pix/t = photons(sky per arcsec²) × pixel area × area × throughput (the
/// sky is already as seen from the ground, so it is not extinguished again).
/// Inputs are checked; errors name the bad value.
pub fn rates(inst: &Instrument, band: &Band, mag: f64, cond: &Conditions) -> Result<Rates> {
    let (a, ext, star) = star_rate(inst, band, mag, cond)?;
    let pix_arcsec2 = inst.pixel_scale_arcsec * inst.pixel_scale_arcsec;
    let sky = band.photons_per_s_cm2(cond.sky_mag_arcsec2) * pix_arcsec2 * a;
    let fwhm_pix = cond.seeing_fwhm_arcsec / inst.pixel_scale_arcsec;
    let sigma = fwhm_pix / FWHM_PER_SIGMA;
    let [ri, ro] = inst.sky_annulus_fwhm;
    let n_b = std::f64::consts::PI * (ro * ro - ri * ri) * fwhm_pix * fwhm_pix;
    let digit = inst.gain_e_per_adu * DIGITIZATION_ADU;
    let p = erf(0.5 / (std::f64::consts::SQRT_2 * sigma));
    Ok(Rates {
        star_e_per_s: star,
        sky_e_per_pix_s: sky,
        dark_e_per_pix_s: inst.dark_e_per_pix_s,
        read_e: (inst.read_noise_e.powi(2) + digit * digit).sqrt(),
        scint_frac_sqrt_s: scintillation_young(
            inst.aperture_m * 100.0,
            cond.airmass,
            cond.site_elev_m,
            1.0,
        ),
        sigma_pix: sigma,
        background_pixels: n_b,
        peak_fraction: p * p,
        max_radius_pix: (3.0f64.min(ri) * fwhm_pix).max(0.5),
        extinction_mag: ext,
    })
}

/// The checks of [`rates`] and its collecting area × throughput, extinction
/// and star electrons per second.
fn star_rate(
    inst: &Instrument,
    band: &Band,
    mag: f64,
    cond: &Conditions,
) -> Result<(f64, f64, f64)> {
    check_mag(mag)?;
    check_conditions(cond)?;
    let tp = inst.throughput_in(&band.name)?;
    let a = inst.area_cm2() * tp;
    let ext = crate::sky::extinction_mag(band, cond.airmass);
    let star = band.photons_per_s_cm2(mag + ext) * a;
    Ok((a, ext, star))
}

/// [`rates`] of another star (magnitude `mag`) seen as the star of `like`
/// was (`like` = `rates(inst, band, _, cond)`): the same checks and the same
/// numbers, the parts that do not depend on the star taken from `like`.
pub fn rates_like(
    inst: &Instrument,
    band: &Band,
    mag: f64,
    cond: &Conditions,
    like: &Rates,
) -> Result<Rates> {
    let (_, ext, star) = star_rate(inst, band, mag, cond)?;
    Ok(Rates {
        star_e_per_s: star,
        extinction_mag: ext,
        ..*like
    })
}

impl Rates {
    /// FWHM of the PSF, pixels.
    pub fn fwhm_pix(&self) -> f64 {
        self.sigma_pix * FWHM_PER_SIGMA
    }

    /// The same rates for a star `dmag` magnitudes fainter.
    pub fn fainter_by(&self, dmag: f64) -> Rates {
        Rates {
            star_e_per_s: self.star_e_per_s * 10f64.powf(-0.4 * dmag),
            ..*self
        }
    }

    /// Electrons per second in the brightest pixel (star centred on it, plus sky and dark).
    pub fn peak_e_per_s(&self) -> f64 {
        self.star_e_per_s * self.peak_fraction + self.sky_e_per_pix_s + self.dark_e_per_pix_s
    }

    /// The CCD equation (module doc) for a total exposure `exptime_s` in `n`
    /// sub-exposures through a circular aperture of radius `radius_pix`.
    pub fn evaluate(
        &self,
        exptime_s: f64,
        n: u32,
        radius_pix: f64,
        saturation_e: f64,
    ) -> NoiseBudget {
        let t = exptime_s;
        let n = n.max(1);
        let e = Exposure::of(&(self, t, n));
        let Terms {
            frac,
            npix,
            nstar,
            v_sky,
            v_dark,
            v_read,
            v_sc,
            total,
        } = e.terms(radius_pix);
        let (s, d, sc, v_star) = (e.sky_e, e.dark_e, e.scint_frac, nstar);
        let sub = t / n as f64;
        let peak = self.peak_e_per_s() * sub;
        NoiseBudget {
            snr: if total > 0.0 { nstar / total } else { 0.0 },
            exptime_s: t,
            n_exposures: n,
            sub_exptime_s: sub,
            star_electrons: nstar,
            sky_electrons_per_pixel: s,
            dark_electrons_per_pixel: d,
            aperture_radius_pix: radius_pix,
            aperture_pixels: npix,
            background_pixels: self.background_pixels,
            encircled_fraction: frac,
            noise_star_e: v_star.sqrt(),
            noise_sky_e: v_sky.sqrt(),
            noise_dark_e: v_dark.sqrt(),
            noise_read_e: v_read.sqrt(),
            noise_scintillation_e: v_sc.sqrt(),
            noise_total_e: total,
            scintillation_frac: sc,
            peak_pixel_electrons: peak,
            saturation_electrons: saturation_e,
            saturated: peak > saturation_e,
        }
    }

    /// The aperture radius (pixels) that maximizes the SNR for this exposure,
    /// between 0.5 pixel and the smaller of 3 FWHM and the sky annulus's
    /// inner radius ([`Self::max_radius_pix`]). Background-limited it tends to
    /// [`BACKGROUND_LIMITED_RADIUS_FWHM`]; for bright stars it grows. Found as
    /// the root of the SNR's derivative ([`Exposure::best_radius_pix`]).
    pub fn best_radius_pix(&self, exptime_s: f64, n: u32) -> f64 {
        Exposure::of(&(self, exptime_s, n)).best_radius_pix()
    }

    /// The SNR of [`Self::snr_for`] with the split `n` known: that of
    /// [`Self::evaluate`] through [`Self::best_radius_pix`] (the same
    /// numbers), without the rest of the budget.
    /// `ends` keeps the search's ends between calls (worked out when
    /// `None` or another σ's).
    pub fn snr_best(&self, exptime_s: f64, n: u32, ends: &mut Option<RadiusEnds>) -> f64 {
        let e = Exposure::of(&(self, exptime_s, n));
        let ends = match ends {
            Some(x) if x.fit(&e) => x,
            _ => ends.insert(RadiusEnds::of(&e)),
        };
        let Terms { nstar, total, .. } = e.terms(e.best_radius_pix_in(ends));
        if total > 0.0 { nstar / total } else { 0.0 }
    }

    /// [`Self::best_radius_pix`] of several stars' rates, exposures and
    /// splits, in order, each the answer of that job alone.
    pub fn best_radius_pix_each(jobs: &[(&Rates, f64, u32)]) -> Vec<f64> {
        jobs.iter()
            .map(|job| Exposure::of(job).best_radius_pix())
            .collect()
    }

    /// Exposure time (s) that reaches `snr` with `n` sub-exposures and a fixed
    /// aperture `radius_pix`. Closed form: with N* = A t, the variance is
    /// a t + b (a = A + n'(S + D) + σ_sc²√s · A², b = n n' R², n' = n_pix(1 + n_pix/n_B)),
    /// so SNR² (a t + b) = A² t² gives
    /// t = [SNR² a + √(SNR⁴ a² + 4 A² SNR² b)] / (2 A²).
    /// Scintillation ∝ t^−1/2 enters linearly in t, so the form stays exact with it.
    pub fn exptime_closed_form(&self, snr: f64, n: u32, radius_pix: f64) -> f64 {
        let frac = 1.0 - (-radius_pix * radius_pix / (2.0 * self.sigma_pix * self.sigma_pix)).exp();
        let npix = std::f64::consts::PI * radius_pix * radius_pix;
        let f = npix * (1.0 + npix / self.background_pixels);
        let a_rate = self.star_e_per_s * frac;
        let a = a_rate
            + f * (self.sky_e_per_pix_s + self.dark_e_per_pix_s)
            + self.scint_frac_sqrt_s.powi(2) * a_rate * a_rate;
        let b = f * n.max(1) as f64 * self.read_e * self.read_e;
        let s2 = snr * snr;
        (s2 * a + (s2 * s2 * a * a + 4.0 * a_rate * a_rate * s2 * b).sqrt())
            / (2.0 * a_rate * a_rate)
    }

    /// The longest sub-exposure (s) that keeps the peak pixel under the
    /// instrument's linear limit ([`Instrument::peak_limit_e`]) and within its
    /// longest single exposure. It may be shorter than the shortest exposure
    /// the shutter allows: the star then passes the linear limit whatever is done.
    pub fn longest_sub_s(&self, inst: &Instrument) -> f64 {
        let peak = self.peak_e_per_s();
        let by_peak = if peak > 0.0 {
            inst.peak_limit_e() / peak
        } else {
            f64::INFINITY
        };
        by_peak.min(inst.max_sub_exptime_s)
    }

    /// Sub-exposures for a total `exptime_s`: the fewest that keep each one
    /// within [`Self::longest_sub_s`], but none shorter than the shortest
    /// exposure (a star too bright for that is then split into the shortest
    /// exposures and passes the linear limit, which the budget flags).
    /// Errors: a total shorter than the shortest exposure, or a split into
    /// more than [`bounds::MAX_SUB_EXPOSURES`](crate::bounds::MAX_SUB_EXPOSURES).
    pub fn n_exposures_for(&self, exptime_s: f64, inst: &Instrument) -> Result<u32> {
        use crate::bounds::{MAX_SUB_EXPOSURES, show, too_many_sub_exposures};
        if exptime_s < inst.min_exptime_s * (1.0 - 1e-9) {
            return Err(RungError::invalid(
                "exposure time",
                format!(
                    "{} s is shorter than the shortest exposure of {} ({} s)",
                    show(exptime_s),
                    inst.name,
                    show(inst.min_exptime_s)
                ),
            ));
        }
        // A tolerance of 1e-9 so that a total of exactly n sub-exposures
        // (as the exposure search returns) splits into n, not n ± 1.
        let need = (exptime_s / self.longest_sub_s(inst) - 1e-9)
            .ceil()
            .max(1.0);
        let most = (exptime_s / inst.min_exptime_s + 1e-9).floor().max(1.0);
        let n = need.min(most);
        if n > MAX_SUB_EXPOSURES as f64 {
            return Err(RungError::invalid(
                "exposure time",
                format!(
                    "a {} s exposure with {}: {}",
                    show(exptime_s),
                    inst.name,
                    too_many_sub_exposures(n)
                ),
            ));
        }
        Ok(n as u32)
    }

    /// The SNR reached in a total `exptime_s` (split as [`Self::n_exposures_for`]),
    /// through the optimal aperture.
    pub fn snr_for(&self, exptime_s: f64, inst: &Instrument) -> Result<NoiseBudget> {
        let n = self.n_exposures_for(exptime_s, inst)?;
        let r = self.best_radius_pix(exptime_s, n);
        Ok(self.evaluate(exptime_s, n, r, inst.saturation_e()))
    }

    /// Total exposure (s) reaching `snr` in `n` sub-exposures through the
    /// optimal aperture: the closed form for a fixed aperture, iterated with the
    /// aperture that is best for that time until the time is stable.
    fn exptime_in(&self, snr: f64, n: u32, floor_s: f64) -> f64 {
        let mut r =
            (BACKGROUND_LIMITED_RADIUS_FWHM * self.fwhm_pix()).clamp(0.5, self.max_radius_pix);
        let mut t = self.exptime_closed_form(snr, n, r);
        for _ in 0..100 {
            if !t.is_finite() {
                break;
            }
            r = self.best_radius_pix(t.max(floor_s), n);
            let t_new = self.exptime_closed_form(snr, n, r);
            let done = (t_new - t).abs() <= 1e-9 * t;
            t = t_new;
            if done {
                break;
            }
        }
        t
    }

    /// The shortest exposure that reaches `snr` with every sub-exposure
    /// within [`Self::longest_sub_s`] and none shorter than the shortest
    /// exposure: for each split n from the fewest the time needs, the total
    /// T(n) that reaches the goal (more sub-exposures cost read noise, so T
    /// grows with n); the first n whose sub-exposures T(n)/n fit is the answer,
    /// with the total raised to n shortest exposures when T(n)/n is shorter
    /// than the shutter allows (the SNR is then higher than asked). So when
    /// one exposure would pass the linear limit and two of the shortest reach
    /// the goal, the answer is two of the shortest. A star that passes the
    /// linear limit even in the shortest exposure gets shortest exposures
    /// (flagged by the peak pixel, `saturated` past the full well).
    ///
    /// Errors: a goal that needs more than a day of exposure
    /// ([`bounds::EXPTIME_S`](crate::bounds::EXPTIME_S)) or more than
    /// [`bounds::MAX_SUB_EXPOSURES`](crate::bounds::MAX_SUB_EXPOSURES)
    /// sub-exposures (a star too faint, or too bright for the instrument).
    pub fn exptime_for(&self, snr: f64, inst: &Instrument) -> Result<NoiseBudget> {
        use crate::bounds::{
            EXPTIME_S, MAX_SUB_EXPOSURES, show, show_about, too_many_sub_exposures,
        };
        let sub_lo = inst.min_exptime_s;
        let sub_cap = self.longest_sub_s(inst).max(sub_lo);
        let too_long = |t: f64| {
            RungError::invalid(
                "exposure",
                format!(
                    "SNR {} needs {} h of exposure with {}, more than one visit may hold ({} h)",
                    show(snr),
                    if t.is_finite() {
                        show_about(t / 3600.0)
                    } else {
                        "endless".into()
                    },
                    inst.name,
                    show(EXPTIME_S.max / 3600.0)
                ),
            )
        };
        let t1 = self.exptime_in(snr, 1, sub_lo);
        if !(t1.is_finite() && t1 <= EXPTIME_S.max) {
            return Err(too_long(t1));
        }
        let mut n = (t1 / sub_cap - 1e-9).ceil().max(1.0);
        let (t, n) = loop {
            if n > MAX_SUB_EXPOSURES as f64 {
                return Err(RungError::invalid(
                    "exposure",
                    format!(
                        "SNR {} with {}: {}",
                        show(snr),
                        inst.name,
                        too_many_sub_exposures(n)
                    ),
                ));
            }
            let k = n as u32;
            let tn = self.exptime_in(snr, k, sub_lo);
            if !(tn.is_finite() && tn <= EXPTIME_S.max) {
                return Err(too_long(tn));
            }
            if tn <= n * sub_cap * (1.0 + 1e-9) {
                break (tn.max(n * sub_lo), k);
            }
            n = (n + 1.0).max((tn / sub_cap - 1e-9).ceil());
        };
        if t > EXPTIME_S.max {
            return Err(too_long(t));
        }
        let r = self.best_radius_pix(t, n);
        Ok(self.evaluate(t, n, r, inst.saturation_e()))
    }

    /// Faintest magnitude reaching `snr` in a total `exptime_s` (these rates
    /// being for magnitude `mag_ref`), by bisection to 10⁻⁶ mag; the split
    /// follows only the longest-single-exposure rule (faint stars do not saturate).
    pub fn limiting_mag(&self, mag_ref: f64, exptime_s: f64, snr: f64, inst: &Instrument) -> f64 {
        let n = (exptime_s / inst.max_sub_exptime_s).ceil().max(1.0) as u32;
        let snr_at = |m: f64| {
            let r = self.fainter_by(m - mag_ref);
            r.evaluate(exptime_s, n, r.best_radius_pix(exptime_s, n), f64::INFINITY)
                .snr
        };
        let (mut lo, mut hi) = (-10.0f64, 45.0f64);
        if snr_at(lo) < snr {
            return f64::NEG_INFINITY;
        }
        while hi - lo > 1e-6 {
            let mid = 0.5 * (lo + hi);
            if snr_at(mid) >= snr {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn erf_values() {
        // erf(0.5) = 0.5204998778, erf(1) = 0.8427007929 (Abramowitz & Stegun Table 7.1).
        assert!((erf(0.5) - 0.520_499_877_8).abs() < 2e-7);
        assert!((erf(1.0) - 0.842_700_792_9).abs() < 2e-7);
        assert!((erf(-1.0) + 0.842_700_792_9).abs() < 2e-7);
    }

    /// The golden-section search of 60 steps over the same interval, with
    /// `Rates::evaluate` itself: the reference the root of the SNR's
    /// derivative (`Exposure::best_radius_pix`) is checked against (the
    /// search the aperture was found by before).
    fn best_radius_one(r: &Rates, exptime_s: f64, n: u32) -> f64 {
        let g = 0.618_033_988_749_895;
        let snr = |x: f64| r.evaluate(exptime_s, n, x, f64::INFINITY).snr;
        let mut a = 0.5f64.min(r.max_radius_pix);
        let mut b = r.max_radius_pix;
        let mut c = b - g * (b - a);
        let mut d = a + g * (b - a);
        let (mut fc, mut fd) = (snr(c), snr(d));
        for _ in 0..60 {
            if fc > fd {
                b = d;
                d = c;
                fd = fc;
                c = b - g * (b - a);
                fc = snr(c);
            } else {
                a = c;
                c = d;
                fc = fd;
                d = a + g * (b - a);
                fd = snr(d);
            }
        }
        0.5 * (a + b)
    }

    /// A job drawn across the model's ranges: stars from far brighter than
    /// the sky to far fainter, short and long exposures, one to many
    /// sub-exposures, narrow and wide PSFs, sky-, dark- and read-limited,
    /// scintillation strong or none, small and large sky annuli and
    /// largest radii from under 0.5 pixel to 3 FWHM.
    fn random_rates(u: &mut impl FnMut() -> f64) -> (Rates, f64, u32) {
        let sigma = 10f64.powf(-1.0 + 1.8 * u());
        let fwhm = sigma * FWHM_PER_SIGMA;
        let ri = 0.1 + 4.9 * u();
        let max_radius_pix = match (u() * 10.0) as u32 {
            0 => 0.05 + 0.5 * u(),
            1 => 0.5 + 0.01 * u(),
            _ => (3.0f64.min(ri) * fwhm).max(0.5),
        };
        let rates = Rates {
            star_e_per_s: 10f64.powf(-3.0 + 11.0 * u()),
            sky_e_per_pix_s: if u() < 0.1 {
                0.0
            } else {
                10f64.powf(-4.0 + 7.0 * u())
            },
            dark_e_per_pix_s: if u() < 0.3 {
                0.0
            } else {
                10f64.powf(-4.0 + 3.0 * u())
            },
            read_e: if u() < 0.05 { 0.0 } else { 0.5 + 20.0 * u() },
            scint_frac_sqrt_s: if u() < 0.3 { 0.0 } else { 0.2 * u() },
            sigma_pix: sigma,
            background_pixels: 10f64.powf(0.5 + 4.0 * u()),
            peak_fraction: 0.1,
            max_radius_pix,
            extinction_mag: 0.1,
        };
        (
            rates,
            10f64.powf(-2.0 + 6.9 * u()),
            1 + (u() * u() * 200.0) as u32,
        )
    }

    #[test]
    fn best_radius_snr_is_the_golden_section_searchs() {
        // The SNR through the root of the derivative against the SNR
        // through a golden-section search of 60 steps (best_radius_one),
        // on random jobs and edge cases: equal to 1e-12 relative (the SNR
        // is flat at the optimum, so both radii give it to rounding).
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut u = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut jobs: Vec<(Rates, f64, u32)> = (0..20_000).map(|_| random_rates(&mut u)).collect();
        let (base, _, _) = random_rates(&mut u);
        let base = Rates {
            max_radius_pix: 3.0 * base.fwhm_pix().max(0.5),
            ..base
        };
        let edge = [
            // No star light: the SNR is zero at every radius.
            Rates {
                star_e_per_s: 0.0,
                ..base
            },
            // No sky, dark or read noise: the SNR grows with the radius.
            Rates {
                sky_e_per_pix_s: 0.0,
                dark_e_per_pix_s: 0.0,
                read_e: 0.0,
                ..base
            },
            // No noise at all but the scintillation.
            Rates {
                sky_e_per_pix_s: 0.0,
                dark_e_per_pix_s: 0.0,
                read_e: 0.0,
                scint_frac_sqrt_s: 0.1,
                ..base
            },
            // A largest radius under 0.5 pixel, and exactly 0.5.
            Rates {
                max_radius_pix: 0.3,
                ..base
            },
            Rates {
                max_radius_pix: 0.5,
                ..base
            },
            // A PSF far narrower than 0.5 pixel: the optimum is the smallest radius.
            Rates {
                sigma_pix: 0.02,
                max_radius_pix: 3.0,
                ..base
            },
            // A PSF far wider than the largest radius: the optimum is the largest.
            Rates {
                sigma_pix: 50.0,
                max_radius_pix: 3.0,
                ..base
            },
            // A star so bright the sky hardly counts.
            Rates {
                star_e_per_s: 1e12,
                ..base
            },
        ];
        for r in edge {
            for (t, n) in [(1e-3, 1), (1.0, 1), (300.0, 5), (86_400.0, 300)] {
                jobs.push((r, t, n));
            }
        }
        let mut worst = 0.0f64;
        let mut interior = 0;
        for (k, (r, t, n)) in jobs.iter().enumerate() {
            let want_r = best_radius_one(r, *t, *n);
            let got_r = r.best_radius_pix(*t, *n);
            let lo = 0.5f64.min(r.max_radius_pix);
            assert!(
                (lo..=r.max_radius_pix).contains(&got_r),
                "{k}: {got_r} {r:?}"
            );
            let want = r.evaluate(*t, *n, want_r, f64::INFINITY).snr;
            let got = r.evaluate(*t, *n, got_r, f64::INFINITY).snr;
            let rel = if want == 0.0 {
                got.abs()
            } else {
                (got / want - 1.0).abs()
            };
            assert!(
                rel <= 1e-12,
                "job {k}: SNR {got} at r = {got_r}, golden {want} at r = {want_r}: {r:?} t = {t} n = {n}"
            );
            worst = worst.max(rel);
            if got_r > lo * 1.01 && got_r < r.max_radius_pix * 0.99 {
                interior += 1;
            }
        }
        // Most jobs have their optimum inside the interval (not a test of an edge).
        assert!(interior > jobs.len() / 2, "{interior} of {}", jobs.len());
        eprintln!("largest relative SNR difference {worst:e}, {interior} interior");
        // The edges: no star light and no noise but the star's give the
        // largest radius, as the search tends to; a largest radius under 0.5
        // pixel is the only radius there is.
        assert_eq!(edge[0].best_radius_pix(300.0, 5), edge[0].max_radius_pix);
        assert_eq!(edge[1].best_radius_pix(300.0, 5), edge[1].max_radius_pix);
        assert_eq!(edge[3].best_radius_pix(300.0, 5), 0.3);
        assert_eq!(edge[5].best_radius_pix(300.0, 5), 0.5);
        assert_eq!(edge[6].best_radius_pix(300.0, 5), 3.0);
        // best_radius_pix_each is best_radius_pix of each job, in order.
        let each: Vec<(&Rates, f64, u32)> =
            jobs[..50].iter().map(|(r, t, n)| (r, *t, *n)).collect();
        let got = Rates::best_radius_pix_each(&each);
        for (g, (r, t, n)) in got.iter().zip(&each) {
            assert_eq!(g.to_bits(), r.best_radius_pix(*t, *n).to_bits());
        }
        // snr_best is the SNR of evaluate through best_radius_pix to the
        // bit, with the search's ends kept from job to job (every job's
        // σ differs: worked out again each time) and for one star at
        // several exposures (the same σ: kept).
        let mut ends = None;
        for (r, t, n) in &jobs {
            let want = r.evaluate(*t, *n, r.best_radius_pix(*t, *n), f64::INFINITY);
            assert_eq!(r.snr_best(*t, *n, &mut ends).to_bits(), want.snr.to_bits());
            assert_eq!(r.snr_best(*t, *n, &mut None).to_bits(), want.snr.to_bits());
        }
        for r in edge.iter().chain(jobs.iter().take(200).map(|j| &j.0)) {
            let mut ends = None;
            for (t, n) in [(1e-3, 1), (1.0, 1), (30.0, 2), (300.0, 5), (86_400.0, 300)] {
                let want = r.evaluate(t, n, r.best_radius_pix(t, n), f64::INFINITY);
                assert_eq!(r.snr_best(t, n, &mut ends).to_bits(), want.snr.to_bits());
            }
        }
    }

    #[test]
    fn rates_like_is_rates() {
        // Another star's rates from the first one's are rates() of that
        // star, field by field to the bit, and refuse what rates() refuses.
        let inst = crate::photometry::instrument::demo().unwrap();
        let bands = crate::sky::BandSet::builtin().unwrap();
        let band = bands.get("V").unwrap();
        for airmass in [1.0, 1.3, 2.7] {
            for sky in [17.5, 21.0] {
                let cond = Conditions {
                    airmass,
                    sky_mag_arcsec2: sky,
                    seeing_fwhm_arcsec: 1.1,
                    site_elev_m: 2200.0,
                };
                let first = rates(&inst, band, 14.0, &cond).unwrap();
                for mag in [8.0, 14.0, 17.25, 22.0] {
                    let want = rates(&inst, band, mag, &cond).unwrap();
                    let got = rates_like(&inst, band, mag, &cond, &first).unwrap();
                    assert_eq!(format!("{got:?}"), format!("{want:?}"));
                    assert_eq!(got, want);
                }
                let bad = rates(&inst, band, f64::NAN, &cond).unwrap_err();
                let got = rates_like(&inst, band, f64::NAN, &cond, &first).unwrap_err();
                assert_eq!(got.to_string(), bad.to_string());
            }
        }
    }
}
