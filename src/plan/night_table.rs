//! One night's table: per target the row that `rung night` prints and the
//! UI's Roster and Tonight views show, from the visibility table
//! (`astro::visibility`) and the night's contexts. One function makes the
//! row, so the command and the views cannot disagree.

use crate::astro::SunUpGrid;
use crate::astro::frames::CatalogPlace;
use crate::astro::night::{Limits, Night, TargetNight};
use crate::astro::time::Instant;
use crate::error::Result;
use crate::sky::{BandSet, SkyAt, SkyBrightness, SkyGeometry, sky_brightness};
use rayon::prelude::*;

/// A target in a night: events, windows, the highest altitude in the dark,
/// and what the sky is like there at the best time.
#[derive(Debug, Clone, PartialEq)]
pub struct NightRow {
    /// Rise, transit, set, windows, observable hours, highest altitude in the
    /// dark, its time and airmass.
    pub night: TargetNight,
    /// Target–Moon distance at the best time (topocentric), degrees.
    pub moon_separation_deg: Option<f64>,
    /// The sky geometry at the best time (target, Moon and Sun altitudes,
    /// Moon distance and phase), what the sky-brightness model needs in any band.
    pub sky: Option<SkyGeometry>,
    /// The first instant on the night's grid with the target above the horizon
    /// within the site's Sun-avoidance angle while the Sun is up, with the
    /// caution text (`astro::first_sun_caution`).
    pub sun_caution: Option<(Instant, String)>,
}

impl NightRow {
    /// Sky brightness at the best time in `band` (K&S model, `crate::sky`);
    /// `None` when the target has no best time (no dark time) or is below
    /// the horizon then.
    pub fn sky_brightness(&self, bands: &BandSet, band: &str) -> Option<Result<SkyBrightness>> {
        let g = self.sky.as_ref()?;
        if g.target_alt_rad <= 0.0 {
            return None;
        }
        Some(
            bands
                .get(band)
                .and_then(|b| sky_brightness(b, &bands.twilight, g)),
        )
    }
}

/// The row of `place` in `night` under `limits`.
pub fn row(night: &Night, place: &CatalogPlace, limits: &Limits) -> NightRow {
    let dark = night.dark_intervals(limits.sun_alt_deg);
    row_in(night, &SunUpGrid::new(night), &dark, &[], place, limits)
}

/// [`row`] with the night's Sun-up instants found once, and the sky at the
/// ends of the dark intervals (where most targets are highest in the dark)
/// made once, for many targets.
fn row_in(
    night: &Night,
    sun_up: &SunUpGrid,
    dark: &[(Instant, Instant)],
    dark_ends: &[SkyAt],
    place: &CatalogPlace,
    limits: &Limits,
) -> NightRow {
    // One track for the row and the Sun caution; the night's dark intervals
    // under `limits` (`night.dark_intervals`), as `Night::target_on` takes them.
    let track = night.track(place);
    let tn = track.target_night(&night.site, dark, limits);
    let sky = tn.max_altitude_time.map(|t| {
        let same = |x: &&SkyAt| {
            (x.ctx.t.utc1.to_bits(), x.ctx.t.utc2.to_bits()) == (t.utc1.to_bits(), t.utc2.to_bits())
        };
        match dark_ends.iter().find(same) {
            Some(at) => SkyGeometry::at_in(at, place),
            None => SkyGeometry::at(&night.context(t), place),
        }
    });
    NightRow {
        moon_separation_deg: sky.map(|g| g.moon_sep_rad.to_degrees()),
        sky,
        sun_caution: crate::astro::first_sun_caution_on(night, sun_up, &track, place),
        night: tn,
    }
}

/// What every row of a night shares, found once: the night's Sun-up
/// instants and the sky at the ends of its dark intervals (where most
/// targets are highest in the dark). [`Rows::row`] then makes one target's
/// row, the same bits as [`rows`] gives it, on any thread, while other
/// targets are still being read.
pub struct Rows<'a> {
    night: &'a Night,
    limits: Limits,
    sun_up: SunUpGrid,
    dark: Vec<(Instant, Instant)>,
    dark_ends: Vec<SkyAt>,
}

impl<'a> Rows<'a> {
    /// The shared part of `night`'s rows under `limits`.
    pub fn new(night: &'a Night, limits: &Limits) -> Self {
        let sun_up = SunUpGrid::new(night);
        let dark = night.dark_intervals(limits.sun_alt_deg);
        let dark_ends: Vec<SkyAt> = dark
            .iter()
            .flat_map(|d| [d.0, d.1])
            .map(|t| SkyAt::new(&night.context(t)))
            .collect();
        Rows {
            night,
            limits: *limits,
            sun_up,
            dark,
            dark_ends,
        }
    }

    /// The row of `place`.
    pub fn row(&self, place: &CatalogPlace) -> NightRow {
        row_in(
            self.night,
            &self.sun_up,
            &self.dark,
            &self.dark_ends,
            place,
            &self.limits,
        )
    }
}

/// The rows of every place, in order, computed on all cores.
pub fn rows(night: &Night, places: &[CatalogPlace], limits: &Limits) -> Vec<NightRow> {
    let shared = Rows::new(night, limits);
    places.par_iter().map(|p| shared.row(p)).collect()
}

/// Observed altitude (degrees) of `place` at each instant of the night's
/// grid, for drawing: the closed form of its track (good to about 1″) with
/// SOFA's refraction from the site's table.
pub fn altitude_track(night: &Night, place: &CatalogPlace) -> Vec<f32> {
    let track = night.track(place);
    let refr = night.sky.refraction();
    night
        .times
        .iter()
        .map(|t| {
            let g = track
                .sin_alt_linear(night.sky.offset(*t))
                .clamp(-1.0, 1.0)
                .asin();
            refr.observed(g).to_degrees() as f32
        })
        .collect()
}
