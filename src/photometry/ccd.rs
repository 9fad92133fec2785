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
/// scintillation fraction), once, so that a golden-section search over the
/// radius ([`Rates::best_radius_pix_each`]) and `evaluate` share one
/// arithmetic ([`Exposure::terms`]).
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

impl Terms {
    fn snr(&self) -> f64 {
        if self.total > 0.0 {
            self.nstar / self.total
        } else {
            0.0
        }
    }
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

    #[inline(always)]
    fn snr(&self, radius_pix: f64) -> f64 {
        self.terms(radius_pix).snr()
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
    check_mag(mag)?;
    check_conditions(cond)?;
    let tp = inst.throughput_in(&band.name)?;
    let a = inst.area_cm2() * tp;
    let ext = crate::sky::extinction_mag(band, cond.airmass);
    let star = band.photons_per_s_cm2(mag + ext) * a;
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
    /// by golden-section search between 0.5 pixel and the smaller of 3 FWHM
    /// and the sky annulus's inner radius. Background-limited it tends to
    /// [`BACKGROUND_LIMITED_RADIUS_FWHM`]; for bright stars it grows.
    pub fn best_radius_pix(&self, exptime_s: f64, n: u32) -> f64 {
        Self::best_radius_pix_each(&[(self, exptime_s, n)])[0]
    }

    /// [`Self::best_radius_pix`] of several stars' rates, exposures and
    /// splits, in order: the same golden-section search for each, their
    /// steps taken side by side (a step of one search does not wait for
    /// another's, so the processor overlaps them), each answer the one the
    /// search alone gives, bit for bit. The SNR at each radius is
    /// [`Self::evaluate`]'s (the same [`Exposure::terms`]),
    /// with what does not change along a search worked out once.
    pub fn best_radius_pix_each(jobs: &[(&Rates, f64, u32)]) -> Vec<f64> {
        const W: usize = 8;
        let g = 0.618_033_988_749_895;
        let mut out = Vec::with_capacity(jobs.len());
        for chunk in jobs.chunks(W) {
            let chunk: Vec<Exposure> = chunk.iter().map(Exposure::of).collect();
            let snr = |j: &Exposure, r: f64| j.snr(r);
            let (mut a, mut b, mut c, mut d) = ([0.0f64; W], [0.0f64; W], [0.0f64; W], [0.0f64; W]);
            let (mut fc, mut fd) = ([0.0f64; W], [0.0f64; W]);
            for (k, j) in chunk.iter().enumerate() {
                a[k] = 0.5f64.min(j.max_radius_pix);
                b[k] = j.max_radius_pix;
                c[k] = b[k] - g * (b[k] - a[k]);
                d[k] = a[k] + g * (b[k] - a[k]);
                fc[k] = snr(j, c[k]);
                fd[k] = snr(j, d[k]);
            }
            for _ in 0..60 {
                for (k, j) in chunk.iter().enumerate() {
                    if fc[k] > fd[k] {
                        b[k] = d[k];
                        d[k] = c[k];
                        fd[k] = fc[k];
                        c[k] = b[k] - g * (b[k] - a[k]);
                        fc[k] = snr(j, c[k]);
                    } else {
                        a[k] = c[k];
                        c[k] = d[k];
                        fc[k] = fd[k];
                        d[k] = a[k] + g * (b[k] - a[k]);
                        fd[k] = snr(j, d[k]);
                    }
                }
            }
            out.extend((0..chunk.len()).map(|k| 0.5 * (a[k] + b[k])));
        }
        out
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

    /// The golden-section search one job at a time, with `if` branches and
    /// `Rates::evaluate` itself: the reference `best_radius_pix_each`
    /// promises to match bit for bit.
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

    #[test]
    fn best_radii_side_by_side_are_each_searchs_to_the_bit() {
        // Stars from far brighter than the sky to far fainter, short and
        // long exposures, one to many sub-exposures, narrow and wide PSFs,
        // strong and no scintillation, and chunks of every length (the
        // lanes past a chunk's end must not change the answers).
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut u = || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut rates = Vec::new();
        for _ in 0..500 {
            let sigma = 0.3 + 4.0 * u();
            let ri = 1.0 + 4.0 * u();
            let fwhm = sigma * FWHM_PER_SIGMA;
            rates.push(Rates {
                star_e_per_s: 10f64.powf(-1.0 + 7.0 * u()),
                sky_e_per_pix_s: 10f64.powf(-2.0 + 4.0 * u()),
                dark_e_per_pix_s: if u() < 0.2 { 0.0 } else { 0.1 * u() },
                read_e: 2.0 + 15.0 * u(),
                scint_frac_sqrt_s: if u() < 0.2 { 0.0 } else { 0.05 * u() },
                sigma_pix: sigma,
                background_pixels: 50.0 + 2000.0 * u(),
                peak_fraction: 0.1,
                max_radius_pix: (3.0f64.min(ri) * fwhm).max(0.5),
                extinction_mag: 0.1,
            });
        }
        let jobs: Vec<(&Rates, f64, u32)> = rates
            .iter()
            .map(|r| (r, 10f64.powf(4.0 * u()), 1 + (20.0 * u()) as u32))
            .collect();
        let want: Vec<u64> = jobs
            .iter()
            .map(|(r, t, n)| best_radius_one(r, *t, *n).to_bits())
            .collect();
        for len in [1, 3, 8, 9, 17, 500] {
            let got = Rates::best_radius_pix_each(&jobs[..len]);
            let got: Vec<u64> = got.iter().map(|x| x.to_bits()).collect();
            assert_eq!(got, want[..len], "{len} jobs");
        }
        // best_radius_pix, one job, is the same search.
        for (r, t, n) in &jobs[..20] {
            assert_eq!(
                r.best_radius_pix(*t, *n).to_bits(),
                best_radius_one(r, *t, *n).to_bits()
            );
        }
    }
}
