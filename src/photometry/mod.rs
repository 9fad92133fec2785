//! Signal-to-noise and exposure time of a point source under the real sky of
//! a site and instant: the band table and sky model of [`crate::sky`], an
//! instrument profile ([`instrument`]), and the CCD equation ([`ccd`]).
//!
//! The distance methods reach it through [`Photometer`], which implements
//! [`crate::ladder::ExposureModel`]:
//!
//! ```no_run
//! use rung::photometry::Photometer;
//! use rung::ladder::ExposureModel;
//! let site = rung::io::sites::resolve("pampa-lucero")?;
//! let ph = Photometer::demo(&site)?; // the invented 1.0 m "lucero-1m"
//! let t = rung::astro::time::parse_instant("2026-12-02T04:00:00Z")?;
//! let ctx = rung::astro::frames::Context::exact(&site, t)?;
//! let star = rung::astro::frames::CatalogPlace::fixed_deg(60.0, -30.0);
//! let snr = ph.snr(18.0, "V", 300.0, &ctx, &star)?;
//! let (exptime_s, n_exposures) = ph.exptime(18.0, "V", 100.0, &ctx, &star)?;
//! # Ok::<(), rung::RungError>(())
//! ```

pub mod ccd;
pub mod instrument;
pub mod spectro;

pub use crate::sky::{Band, BandSet, SkyBrightness, SkyGeometry};
pub use ccd::{Conditions, NoiseBudget, Rates};
pub use instrument::{DEMO_INSTRUMENT, Instrument};

use crate::astro::airmass::kasten_young;
use crate::astro::frames::{CatalogPlace, Context, Observed};
use crate::astro::site::Site;
use crate::error::{Result, RungError};
use crate::ladder::ExposureModel;
use serde::Serialize;

/// One exposure computed at a target and instant: the conditions, the sky,
/// and the full noise budget. Its fields are the JSON contract of
/// `rung snr --json` and `rung exptime --json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Exposure {
    /// Star magnitude above the atmosphere.
    pub mag: f64,
    /// Band name.
    pub band: String,
    /// Instrument name.
    pub instrument: String,
    /// Kasten–Young airmass of the target.
    pub airmass: f64,
    /// Observed (refracted) altitude of the target, degrees.
    pub altitude_deg: f64,
    /// Atmospheric extinction applied to the star, mag.
    pub extinction_mag: f64,
    /// Seeing FWHM used, arcsec.
    pub seeing_fwhm_arcsec: f64,
    /// Moon–target separation, degrees.
    pub moon_separation_deg: f64,
    /// Moon altitude, degrees.
    pub moon_altitude_deg: f64,
    /// Moon illuminated fraction, 0–1.
    pub moon_illumination: f64,
    /// Sun altitude, degrees.
    pub sun_altitude_deg: f64,
    /// Sky brightness at the target in the band, mag arcsec⁻².
    pub sky_mag_arcsec2: f64,
    /// The sky with its parts.
    pub sky: SkyBrightness,
    /// Aperture radius, arcsec.
    pub aperture_radius_arcsec: f64,
    /// The noise budget (flattened into the JSON object).
    #[serde(flatten)]
    pub budget: NoiseBudget,
    /// Cautions (sky model limits, saturation, linearity).
    pub notes: Vec<String>,
}

/// The exposure model for one instrument at one site: bands, instrument, site
/// (for its elevation) and the seeing.
#[derive(Debug, Clone)]
pub struct Photometer {
    /// The instrument.
    pub instrument: Instrument,
    /// The band table and twilight model.
    pub bands: BandSet,
    /// The site (its elevation enters scintillation).
    pub site: Site,
    /// Seeing FWHM used, arcsec (default: the instrument's typical seeing).
    pub seeing_fwhm_arcsec: f64,
}

impl Photometer {
    /// A photometer from its parts, with the instrument's typical seeing.
    pub fn new(instrument: Instrument, bands: BandSet, site: Site) -> Self {
        let seeing = instrument.seeing_fwhm_arcsec;
        Photometer {
            instrument,
            bands,
            site,
            seeing_fwhm_arcsec: seeing,
        }
    }

    /// The instrument named `name` (config/ and the user config folder) with
    /// the band table (built-in merged with the user's bands.toml) at `site`.
    pub fn from_name(name: &str, site: &Site) -> Result<Self> {
        Ok(Self::new(
            instrument::resolve(name)?,
            BandSet::load()?,
            site.clone(),
        ))
    }

    /// The invented demo instrument ([`DEMO_INSTRUMENT`]) at `site`.
    pub fn demo(site: &Site) -> Result<Self> {
        Self::from_name(DEMO_INSTRUMENT, site)
    }

    /// The same photometer with another seeing FWHM (arcsec, within
    /// [`bounds::SEEING_ARCSEC`](crate::bounds::SEEING_ARCSEC)).
    pub fn with_seeing(mut self, fwhm_arcsec: f64) -> Result<Self> {
        self.seeing_fwhm_arcsec = crate::bounds::SEEING_ARCSEC.check_as("seeing", fwhm_arcsec)?;
        Ok(self)
    }

    /// Sky brightness in `band` at `place` through `ctx`.
    pub fn sky(&self, band: &str, ctx: &Context, place: &CatalogPlace) -> Result<SkyBrightness> {
        self.bands.sky_at(band, ctx, place)
    }

    /// The sky in band `b` at `place` through `ctx`, with the geometry and
    /// the target's Kasten–Young airmass (an error below the horizon).
    fn sky_and_airmass(
        &self,
        b: &Band,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<(SkyGeometry, SkyBrightness, f64)> {
        let g = SkyGeometry::at(ctx, place);
        let sky = crate::sky::sky_brightness(b, &self.bands.twilight, &g)?;
        let airmass = target_airmass(&g)?;
        Ok((g, sky, airmass))
    }

    /// The sky brightness (mag arcsec⁻²) and the airmass of
    /// [`Self::sky_and_airmass`] alone (the same numbers, the same refusals
    /// in the same order), with the target's observed place through `ctx`
    /// taken from `seen` when known.
    fn sky_mag_and_airmass(
        &self,
        b: &Band,
        ctx: &Context,
        place: &CatalogPlace,
        seen: Option<&Observed>,
    ) -> Result<(f64, f64)> {
        let g = match seen {
            Some(o) => SkyGeometry::at_seen(ctx, o),
            None => SkyGeometry::at(ctx, place),
        };
        let sky = crate::sky::sky_mag_arcsec2(b, &self.bands.twilight, &g)?;
        let airmass = target_airmass(&g)?;
        Ok((sky, airmass))
    }

    fn prepare(
        &self,
        mag: f64,
        band: &str,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<(Rates, Exposure)> {
        ccd::check_mag(mag)?;
        let b = self.bands.get(band)?;
        self.instrument.throughput_in(&b.name)?;
        let (g, sky, airmass) = self.sky_and_airmass(b, ctx, place)?;
        let alt_deg = g.target_alt_rad.to_degrees();
        let cond = Conditions {
            airmass,
            sky_mag_arcsec2: sky.sky_mag_arcsec2,
            seeing_fwhm_arcsec: self.seeing_fwhm_arcsec,
            site_elev_m: self.site.elev_m,
        };
        let rates = ccd::rates(&self.instrument, b, mag, &cond)?;
        let template = Exposure {
            mag,
            band: b.name.clone(),
            instrument: self.instrument.name.clone(),
            airmass,
            altitude_deg: alt_deg,
            extinction_mag: rates.extinction_mag,
            seeing_fwhm_arcsec: self.seeing_fwhm_arcsec,
            moon_separation_deg: g.moon_sep_rad.to_degrees(),
            moon_altitude_deg: g.moon_alt_rad.to_degrees(),
            moon_illumination: (1.0 + g.moon_phase_rad.cos()) / 2.0,
            sun_altitude_deg: g.sun_alt_rad.to_degrees(),
            sky_mag_arcsec2: sky.sky_mag_arcsec2,
            notes: sky.notes.clone(),
            sky,
            aperture_radius_arcsec: 0.0,
            budget: rates.evaluate(1.0, 1, 1.0, f64::INFINITY),
        };
        Ok((rates, template))
    }

    /// The rates of [`Self::prepare`] alone (the same checks in the same
    /// order, the same numbers), with the sky and airmass at `ctx` taken
    /// from `sky` when held and kept there when worked out (the target's
    /// observed place from `seen` when known).
    #[allow(clippy::too_many_arguments)]
    fn prepare_rates(
        &self,
        mag: f64,
        band: &str,
        ctx: &Context,
        place: &CatalogPlace,
        seen: Option<&Observed>,
        sky: &mut Option<(f64, f64)>,
        like: Option<&Rates>,
    ) -> Result<Rates> {
        ccd::check_mag(mag)?;
        let b = self.bands.get(band)?;
        self.instrument.throughput_in(&b.name)?;
        let (sky_mag_arcsec2, airmass) = match *sky {
            Some(x) => x,
            None => *sky.insert(self.sky_mag_and_airmass(b, ctx, place, seen)?),
        };
        let cond = Conditions {
            airmass,
            sky_mag_arcsec2,
            seeing_fwhm_arcsec: self.seeing_fwhm_arcsec,
            site_elev_m: self.site.elev_m,
        };
        match like {
            Some(like) => ccd::rates_like(&self.instrument, b, mag, &cond, like),
            None => ccd::rates(&self.instrument, b, mag, &cond),
        }
    }

    /// [`ExposureModel::snr_table`], the target's observed place through
    /// `ctx` taken from `seen` when known: each star's rates (its sky,
    /// airmass and count rates at `ctx`) prepared once, then the same CCD
    /// equation per exposure, checked and asked in the trait's order, so
    /// the same numbers and the same first refusal as one call each.
    fn table(
        &self,
        mags: &[f64],
        band: &str,
        exptimes: &[f64],
        ctx: &Context,
        place: &CatalogPlace,
        seen: Option<&Observed>,
    ) -> Result<Vec<Vec<f64>>> {
        let mut rates: Vec<Option<ccd::Rates>> = mags.iter().map(|_| None).collect();
        // The sky and airmass at `ctx` do not depend on the star's
        // magnitude: worked out for the first star, kept for the others.
        let mut sky: Option<(f64, f64)> = None;
        // The first star's rates lend the others what does not depend on
        // the star (`ccd::rates_like`); the aperture search's ends are
        // kept from cell to cell (`ccd::RadiusEnds`).
        let mut first: Option<Rates> = None;
        let mut ends: Option<ccd::RadiusEnds> = None;
        // Every fallible step in the order one call each takes them (so
        // the first refusal is the same); each cell's SNR is that of
        // `Rates::snr_for` (`Rates::snr_best`).
        exptimes
            .iter()
            .map(|&t| {
                mags.iter()
                    .zip(rates.iter_mut())
                    .map(|(m, r)| {
                        ccd::check_exptime(t)?;
                        let r = match r {
                            Some(r) => r,
                            None => {
                                let x = self.prepare_rates(
                                    *m,
                                    band,
                                    ctx,
                                    place,
                                    seen,
                                    &mut sky,
                                    first.as_ref(),
                                )?;
                                first.get_or_insert(x);
                                r.insert(x)
                            }
                        };
                        let n = r.n_exposures_for(t, &self.instrument)?;
                        Ok(r.snr_best(t, n, &mut ends))
                    })
                    .collect()
            })
            .collect()
    }

    fn finish(&self, mut e: Exposure, budget: NoiseBudget) -> Exposure {
        e.aperture_radius_arcsec = budget.aperture_radius_pix * self.instrument.pixel_scale_arcsec;
        if budget.saturated {
            e.notes.push(format!(
                "the peak pixel reaches {:.0} e⁻ in the shortest sub-exposure, past saturation ({:.0} e⁻): defocus, use a narrower band or a smaller telescope",
                budget.peak_pixel_electrons, budget.saturation_electrons
            ));
        } else if budget.peak_pixel_electrons > self.instrument.peak_limit_e() * (1.0 + 1e-9) {
            e.notes.push(format!(
                "the peak pixel reaches {:.0} e⁻, above the linear limit ({:.0}% of {:.0} e⁻)",
                budget.peak_pixel_electrons,
                100.0 * self.instrument.linear_fraction,
                budget.saturation_electrons
            ));
        }
        if budget.exptime_s > 12.0 * 3600.0 {
            e.notes.push(format!(
                "{:.1} h of exposure is more than one night holds: the goal is out of reach for this star with {}",
                budget.exptime_s / 3600.0,
                self.instrument.name
            ));
        }
        e.budget = budget;
        e
    }

    /// SNR of a star of magnitude `mag` (above the atmosphere) in `band` for a
    /// total exposure `exptime_s` (s), split to avoid saturation, at `place`
    /// seen through `ctx`. Errors: bad magnitude or exposure, unknown band,
    /// target below the horizon.
    pub fn snr_at(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<Exposure> {
        ccd::check_exptime(exptime_s)?;
        let (r, e) = self.prepare(mag, band, ctx, place)?;
        let b = r.snr_for(exptime_s, &self.instrument)?;
        Ok(self.finish(e, b))
    }

    /// Exposure reaching `snr` on a star of magnitude `mag` in `band` at
    /// `place` through `ctx`, split into sub-exposures when one would saturate.
    pub fn exptime_at(
        &self,
        mag: f64,
        band: &str,
        snr: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<Exposure> {
        ccd::check_snr(snr)?;
        let (r, e) = self.prepare(mag, band, ctx, place)?;
        let b = r
            .exptime_for(snr, &self.instrument)
            .map_err(|err| match err {
                // Say which star: the search knows only its rates.
                RungError::Invalid { what, why } => RungError::Invalid {
                    what,
                    why: format!(
                        "a {} = {} star at {why}",
                        e.band,
                        crate::bounds::show_mag(mag)
                    ),
                },
                other => other,
            })?;
        Ok(self.finish(e, b))
    }

    /// Exposure of a long-slit spectrum with the instrument's spectrograph
    /// ([`spectro::Spectrograph::exposure`]) reaching `snr` per resolution
    /// element at `wavelength_angstrom` on a point source of magnitude `mag`
    /// in `band` at `place` through `ctx`: the sky of the band there, the
    /// airmass, the photometer's seeing. Errors: no spectrograph, bad input,
    /// target below the horizon.
    pub fn spectrum_at(
        &self,
        mag: f64,
        band: &str,
        snr: f64,
        wavelength_angstrom: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<spectro::SpectrumBudget> {
        let sp = self.instrument.spectrograph.as_ref().ok_or_else(|| {
            RungError::invalid(
                "spectrograph",
                format!(
                    "instrument {} has no spectrograph ([instrument.spectrograph] in instruments.toml)",
                    self.instrument.name
                ),
            )
        })?;
        ccd::check_mag(mag)?;
        let b = self.bands.get(band)?;
        let (_, sky, airmass) = self.sky_and_airmass(b, ctx, place)?;
        sp.exposure(
            b,
            mag,
            airmass,
            sky.sky_mag_arcsec2,
            self.seeing_fwhm_arcsec,
            self.instrument.area_cm2(),
            snr,
            wavelength_angstrom,
        )
    }

    /// Faintest magnitude (above the atmosphere) reaching `snr` in a total
    /// `exptime_s` in `band` at `place` through `ctx`.
    pub fn limiting_mag_at(
        &self,
        band: &str,
        exptime_s: f64,
        snr: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<f64> {
        ccd::check_exptime(exptime_s)?;
        ccd::check_snr(snr)?;
        let (r, _) = self.prepare(20.0, band, ctx, place)?;
        Ok(r.limiting_mag(20.0, exptime_s, snr, &self.instrument))
    }
}

/// The target's Kasten–Young airmass at the altitude `g` holds (an error
/// below the horizon, where it has none).
fn target_airmass(g: &SkyGeometry) -> Result<f64> {
    let alt_deg = g.target_alt_rad.to_degrees();
    kasten_young(alt_deg).ok_or_else(|| {
        RungError::invalid(
            "target position",
            format!("altitude {alt_deg:.1}° has no airmass"),
        )
    })
}

impl ExposureModel for Photometer {
    fn snr(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<f64> {
        Ok(self.snr_at(mag, band, exptime_s, ctx, place)?.budget.snr)
    }

    /// [`Self::snr`] in a table ([`Photometer::table`]).
    fn snr_table(
        &self,
        mags: &[f64],
        band: &str,
        exptimes: &[f64],
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<Vec<Vec<f64>>> {
        self.table(mags, band, exptimes, ctx, place, None)
    }

    /// [`Self::snr_table`] without observing the target again.
    fn snr_table_seen(
        &self,
        mags: &[f64],
        band: &str,
        exptimes: &[f64],
        ctx: &Context,
        place: &CatalogPlace,
        seen: &Observed,
    ) -> Result<Vec<Vec<f64>>> {
        self.table(mags, band, exptimes, ctx, place, Some(seen))
    }

    /// Errors when the star saturates even in the shortest exposure.
    fn exptime(
        &self,
        mag: f64,
        band: &str,
        snr: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<(f64, u32)> {
        let e = self.exptime_at(mag, band, snr, ctx, place)?;
        if e.budget.saturated {
            return Err(RungError::invalid(
                "magnitude",
                format!(
                    "{} = {} saturates {} even in its shortest exposure ({} s)",
                    e.band,
                    crate::bounds::show_mag(mag),
                    self.instrument.name,
                    self.instrument.min_exptime_s
                ),
            ));
        }
        Ok((e.budget.exptime_s, e.budget.n_exposures))
    }

    fn visit_overhead_s(&self) -> f64 {
        self.instrument.visit_overhead_s
    }

    fn readout_s(&self) -> f64 {
        self.instrument.readout_s
    }

    fn filter_change_s(&self) -> Option<f64> {
        self.instrument.filter_change_s
    }

    fn seeing_fwhm_arcsec(&self) -> f64 {
        self.seeing_fwhm_arcsec
    }

    fn aperture_m(&self) -> Option<f64> {
        Some(self.instrument.aperture_m)
    }

    fn passband_angstrom(&self, band: &str) -> Option<(f64, f64)> {
        let b = self.bands.get(band).ok()?;
        Some((b.lambda_eff_angstrom, b.bandwidth_angstrom))
    }

    fn fov_arcmin(&self) -> Option<[f64; 2]> {
        self.instrument.fov_arcmin.map(|f| f.sides_arcmin())
    }

    fn annulus_outer_arcsec(&self) -> f64 {
        self.instrument.sky_annulus_fwhm[1] * self.seeing_fwhm_arcsec
    }

    /// The split [`ccd::Rates::n_exposures_for`] gives this star.
    fn frames_for(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<u32> {
        ccd::check_exptime(exptime_s)?;
        let (r, _) = self.prepare(mag, band, ctx, place)?;
        r.n_exposures_for(exptime_s, &self.instrument)
    }

    /// The CCD equation with `n_frames` reads, through the aperture best for
    /// this star and split.
    fn snr_in_frames(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        n_frames: u32,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<f64> {
        ccd::check_exptime(exptime_s)?;
        let (r, _) = self.prepare(mag, band, ctx, place)?;
        let n = n_frames.max(1);
        let radius = r.best_radius_pix(exptime_s, n);
        Ok(
            r.evaluate(exptime_s, n, radius, self.instrument.saturation_e())
                .snr,
        )
    }

    fn spectrum_exptime(
        &self,
        mag: f64,
        band: &str,
        snr: f64,
        wavelength_angstrom: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<crate::ladder::SpectrumExposure> {
        let s = self.spectrum_at(mag, band, snr, wavelength_angstrom, ctx, place)?;
        let (name, resolution) = self
            .instrument
            .spectrograph
            .as_ref()
            .map(|s| (s.name.clone(), s.resolution))
            .unwrap_or_default();
        Ok(crate::ladder::SpectrumExposure {
            spectrograph: name,
            exptime_s: s.exptime_s,
            n_exposures: s.n_exposures,
            snr_per_resolution_element: s.snr_per_resolution_element,
            resolution,
            resolution_element_angstrom: s.resolution_element_angstrom,
            slit_transmission: s.slit_transmission,
            visit_s: s.visit_s,
        })
    }
}
