//! Parallax plans: the error model applied to the candidate instants, the
//! exposure of an epoch, the choice of epochs ([`super::select`]), the fit,
//! the DCR bias and the verdict.
//!
//! One selection serves every surface: [`ParallaxMethod::plan`] (a fixed
//! number of epochs), [`ParallaxMethod::goal_plan`] (the fewest hours that
//! reach a goal, or why none can), and through them `Method::propose`,
//! `Method::goal`, the budget, `rung parallax` and the Parallax view.

use super::astrometry::{self, Dcr, EpochError, FrameRule, ReferenceFrame, Source, StarCounts};
use super::select::{self, Candidate, Design, Problem, Stop};
use super::*;
use crate::astro::frames::Context;
use crate::astro::site::Site;
use crate::ladder::GoalSearch;
use std::sync::Arc;

/// One exposure level of an epoch.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EpochLevel {
    /// Total exposure of the epoch, seconds.
    pub exptime_s: f64,
    /// Frames it is split into (saturation and the longest single exposure).
    pub frames: u32,
    /// Target SNR at the rule's reference instant.
    pub snr: f64,
    /// Per-epoch error at the rule's reference instant, mas.
    pub sigma_mas: f64,
    /// Telescope time of the visit with overheads, seconds.
    pub visit_s: f64,
}

/// How the exposure of an epoch follows from the error model: the
/// per-epoch error falls with the exposure (centroids and image motion as
/// t^−1/2) toward its floor while each visit costs its overheads, so one
/// exposure buys the most 1/σ² per telescope hour; an epoch is never
/// shorter than that, nor than the exposure reaching the least SNR.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExposureRule {
    /// The exposure that buys the most precision per telescope hour, seconds.
    pub best_rate_exptime_s: f64,
    /// The shortest exposure reaching the least SNR (`snr`), seconds;
    /// `None` when even the longest epoch does not.
    pub min_snr_exptime_s: Option<f64>,
    /// The levels the search uses (the first is the proposed plan's).
    pub levels: Vec<EpochLevel>,
    /// The instant the rule was worked out at (a candidate near the middle
    /// of the range, nearest the meridian); none when no rule was needed.
    pub reference_time: Option<Instant>,
    /// Attenuation of the target (a neutral-density spot over it), mag: a
    /// target more than `max_target_brighter_mag` brighter than its
    /// reference stars is dimmed to that difference; 0 for the rest. Every
    /// SNR of the plan is the attenuated target's.
    pub target_attenuation_mag: f64,
}

/// The exposure levels are one unit of the rule; the minimum exposure per
/// epoch is the first level's.
impl ExposureRule {
    /// The first (proposed) level.
    pub fn base(&self) -> &EpochLevel {
        &self.levels[0]
    }
}

/// The geometry of an instant.
#[derive(Debug, Clone, Copy)]
struct Geom {
    ha_h: f64,
    airmass: f64,
    tan_z: f64,
    q_rad: f64,
    pf_ra: f64,
    pf_dec: f64,
}

/// The error model for one target with one exposure model.
struct Model<'a> {
    cfg: &'a ParallaxConfig,
    s: &'a Setting<'a>,
    em: &'a dyn ExposureModel,
    place: CatalogPlace,
    mag: f64,
    /// Attenuation of the target (`max_target_brighter_mag`), mag.
    attenuation_mag: f64,
    fwhm: f64,
    aperture_m: f64,
    frame: ReferenceFrame,
    dcr: Dcr,
    notes: Vec<String>,
}

/// The work on a base's epochs that an extra epoch does not change
/// ([`ParallaxMethod::shared_base`]).
pub(crate) struct SharedBase<'a> {
    model: Model<'a>,
    planned: Vec<PlannedEpoch>,
    rule: ExposureRule,
    plx: f64,
    range: Series,
}

/// A shared-face epoch planned with `model` at its context `ctx`: its
/// error at its exposure and SNR ([`ParallaxMethod::planned_from`]).
fn planned_with(model: &Model, e: &Epoch, ctx: &Context) -> Result<PlannedEpoch> {
    let mut p = model.epoch(
        ctx,
        e.exptime_s,
        e.n_exposures,
        Some(e.snr),
        None,
        0,
        Some(e.visit_s),
    )?;
    p.epoch = e.clone();
    Ok(p)
}

/// A candidate instant with its errors at every level.
#[derive(Debug, Clone)]
struct Slot {
    night: usize,
    t: Instant,
    geom: Geom,
    /// Per level: the error, the target SNR, the reference SNR, visit seconds.
    at: Vec<(EpochError, f64, f64, f64)>,
}

impl<'a> Model<'a> {
    fn new(cfg: &'a ParallaxConfig, s: &'a Setting<'a>, em: &'a dyn ExposureModel) -> Result<Self> {
        let t = s.target;
        let mag = target_mag(t)?;
        let place = t.place();
        let mut notes = Vec::new();
        let b = astrometry::galactic_latitude_deg(place.ra_rad, place.dec_rad);
        let rule = FrameRule {
            radius_arcmin: cfg.reference_field_radius_arcmin,
            mag_window: (
                cfg.reference_mag_window_mag[0],
                cfg.reference_mag_window_mag[1],
            ),
            faintest_mag: cfg.reference_faintest_mag,
            max_stars: cfg.max_reference_stars,
            counts: StarCounts {
                pole_per_deg2_at_20: cfg.star_counts_pole_per_deg2_at_20,
                slope_per_mag: cfg.star_counts_slope_per_mag,
                min_latitude_deg: cfg.star_counts_min_latitude_deg,
            },
        };
        let (est_n, est_m) = astrometry::estimate_reference_stars(mag, b, &rule);
        let (count, count_source) = match t.ref_star_count {
            Some(n) if n.fract() != 0.0 => {
                return Err(RungError::invalid(
                    format!("ref_star_count of '{}'", t.name),
                    format!("{n} is not a whole number of stars"),
                ));
            }
            Some(n) => (n, Source::Given),
            None => (est_n, Source::Estimated),
        };
        let (rmag, mag_source) = match t.ref_mag {
            Some(m) => (m, Source::Given),
            None => (est_m, Source::Estimated),
        };
        let (rcol, color_source) = match t.ref_color_vi_mag {
            Some(c) => (c, Source::Given),
            None => (cfg.reference_color_vi_mag, Source::Estimated),
        };
        if count < 3.0 {
            return Err(RungError::invalid(
                format!("target '{}'", t.name),
                format!(
                    "the star counts give only {count:.1} reference stars within {:.1}′ between {:.1} and {:.1} mag (Galactic latitude {b:+.0}°): a linear plate model needs three; give ref_star_count and ref_mag if the field has them, or widen reference_field_radius_arcmin",
                    cfg.reference_field_radius_arcmin,
                    mag + cfg.reference_mag_window_mag[0],
                    (mag + cfg.reference_mag_window_mag[1]).max(cfg.reference_faintest_mag)
                ),
            ));
        }
        if count_source == Source::Estimated || mag_source == Source::Estimated {
            notes.push(format!(
                "reference frame estimated from Galactic star counts (latitude {b:+.0}°): {count:.0} stars of about {rmag:.1} mag within {:.1}′; give ref_star_count and ref_mag for the real field",
                cfg.reference_field_radius_arcmin
            ));
        }
        // A bright target is dimmed to at most max_target_brighter_mag above
        // its frame (config/parallax.toml: a neutral-density spot; common
        // practice), so its core stays below saturation while the exposure
        // averages the image motion down.
        let attenuation_mag = (rmag - cfg.max_target_brighter_mag - mag).max(0.0);
        if attenuation_mag > 0.0 {
            notes.push(format!(
                "{mag:.1} mag is {:.1} mag brighter than the reference stars (about {rmag:.1} mag): the target is attenuated by {attenuation_mag:.1} mag (a neutral-density spot; max_target_brighter_mag = {:.1}), so it stays below saturation over the exposure the image motion needs",
                rmag - mag,
                cfg.max_target_brighter_mag
            ));
        }
        let tcol = match t.color_vi_mag {
            Some(c) => c,
            None => {
                notes.push(format!(
                    "no color_vi_mag: DCR computed for V−I = {:.1} (target_color_vi_mag), typical of the red dwarfs parallax programmes observe",
                    cfg.target_color_vi_mag
                ));
                cfg.target_color_vi_mag
            }
        };
        let dcr = match (
            em.passband_angstrom(&t.band),
            em.passband_angstrom("V"),
            em.passband_angstrom("I"),
        ) {
            (Some(pb), Some(v), Some(i)) => Dcr::new(s.site, pb, (v.0, i.0), tcol, rcol),
            _ => {
                notes.push(format!(
                    "band {} (or V, I) has no passband in the band table: DCR not computed",
                    t.band
                ));
                Dcr {
                    band_lambda_angstrom: 0.0,
                    target_lambda_angstrom: 0.0,
                    reference_lambda_angstrom: 0.0,
                    mas_per_tanz: 0.0,
                }
            }
        };
        let aperture_m = match em.aperture_m() {
            Some(d) => d,
            None => {
                notes.push(format!(
                    "the exposure model gives no aperture: image motion taken at Han's {} m",
                    astrometry::HAN_APERTURE_M
                ));
                astrometry::HAN_APERTURE_M
            }
        };
        Ok(Model {
            cfg,
            s,
            em,
            place,
            mag,
            attenuation_mag,
            fwhm: em.seeing_fwhm_arcsec(),
            aperture_m,
            frame: ReferenceFrame {
                count,
                count_source,
                mag: rmag,
                mag_source,
                color_vi_mag: rcol,
                color_source,
                separation_arcsec: cfg.reference_field_radius_arcmin * 60.0 * 2.0 / 3.0,
                galactic_lat_deg: b,
            },
            dcr,
            notes,
        })
    }

    fn band(&self) -> &str {
        &self.s.target.band
    }

    /// The magnitude the detector sees: the target's, attenuated.
    fn observed_mag(&self) -> f64 {
        self.mag + self.attenuation_mag
    }

    fn geometry(&self, ctx: &Context) -> Result<Geom> {
        self.geometry_seen(ctx, &ctx.observe(&self.place))
    }

    /// [`Self::geometry`] with the target's observed place through `ctx`
    /// (`o`, `ctx.observe(&self.place)`) known.
    fn geometry_seen(&self, ctx: &Context, o: &crate::astro::frames::Observed) -> Result<Geom> {
        let alt = o.alt_rad.to_degrees();
        let airmass = kasten_young(alt).ok_or_else(|| {
            RungError::invalid(
                format!("epoch {}", ctx.t.iso()),
                format!(
                    "'{}' is below the horizon then (altitude {alt:.1}°)",
                    self.s.target.name
                ),
            )
        })?;
        let (pf_ra, pf_dec) =
            parallax_factors(ctx.earth_bary_au(), self.place.ra_rad, self.place.dec_rad);
        let q_rad = sofars::coords::hd2pa(o.ha_rad, o.dec_rad, self.s.site.lat_deg.to_radians());
        Ok(Geom {
            ha_h: o.ha_rad.to_degrees() / 15.0,
            airmass,
            tan_z: 1.0 / o.alt_rad.tan().max(1e-6),
            q_rad,
            pf_ra,
            pf_dec,
        })
    }

    /// The error of an epoch of `exptime_s` at `ctx`, with the target's SNR
    /// (`snr` when known, else from the exposure model) and the reference SNR.
    fn error(
        &self,
        ctx: &Context,
        g: &Geom,
        exptime_s: f64,
        snr: Option<f64>,
    ) -> Result<(EpochError, f64, f64)> {
        // Beyond the SNR bound (10,000) flat fields and scintillation, not
        // photons, set a star's error (crate::bounds::SNR): the centroid
        // terms use at most that.
        let snr_t = match snr {
            Some(x) => x,
            None => self.em.snr(
                self.observed_mag(),
                self.band(),
                exptime_s,
                ctx,
                &self.place,
            )?,
        };
        let snr_r = self
            .em
            .snr(self.frame.mag, self.band(), exptime_s, ctx, &self.place)?;
        self.error_of(g, exptime_s, snr_t, snr_r)
    }

    /// [`Self::error`] with the target's and the reference stars' SNR known.
    fn error_of(
        &self,
        g: &Geom,
        exptime_s: f64,
        snr_t: f64,
        snr_r: f64,
    ) -> Result<(EpochError, f64, f64)> {
        let cap = |x: f64| x.min(crate::bounds::SNR.max);
        let (snr_t, snr_r) = (cap(snr_t), cap(snr_r));
        let centroid = astrometry::centroid_mas(self.fwhm, snr_t)?;
        let reference = astrometry::reference_frame_mas(
            astrometry::centroid_mas(self.fwhm, snr_r)?,
            self.frame.count,
        );
        let motion = astrometry::image_motion_mas(
            self.cfg.image_motion_arcsec,
            self.frame.separation_arcsec,
            self.aperture_m,
            exptime_s,
        );
        let refraction = self.cfg.dcr_mas_per_tanz * g.tan_z;
        Ok((
            EpochError::new(centroid, reference, motion, refraction, self.cfg.floor_mas),
            snr_t,
            snr_r,
        ))
    }

    /// Frames of an epoch of `exptime_s` (the exposure model's split that
    /// keeps the attenuated target below saturation, and the longest single
    /// frame).
    fn frames(&self, ctx: &Context, exptime_s: f64) -> Result<u32> {
        Ok(self
            .em
            .frames_for(
                self.observed_mag(),
                self.band(),
                exptime_s,
                ctx,
                &self.place,
            )?
            .max(1))
    }

    fn visit_s(&self, exptime_s: f64, frames: u32) -> f64 {
        exptime_s + frames as f64 * self.em.readout_s() + self.em.visit_overhead_s()
    }

    /// The exposure rule worked out at `ctx`.
    fn rule(&self, ctx: &Context) -> Result<ExposureRule> {
        let g = self.geometry(ctx)?;
        let max_t = self.cfg.max_epoch_exptime_s;
        let mut grid: Vec<f64> = (0..)
            .map(|k| 10.0 * 1.25f64.powi(k))
            .take_while(|t| *t < max_t)
            .collect();
        grid.push(max_t);
        let mut best: Option<(f64, f64)> = None; // rate, exptime
        let mut min_snr: Option<f64> = None;
        for &t in &grid {
            let (e, snr, _) = self.error(ctx, &g, t, None)?;
            let frames = self.frames(ctx, t)?;
            let rate = 1.0 / (e.total_mas * e.total_mas * self.visit_s(t, frames));
            if best.is_none_or(|b| rate > b.0) {
                best = Some((rate, t));
            }
            if min_snr.is_none() && snr >= self.cfg.snr {
                min_snr = Some(t);
            }
        }
        let best_t = best.map_or(max_t, |b| b.1);
        let base = best_t.max(min_snr.unwrap_or(max_t));
        let mut levels: Vec<EpochLevel> = Vec::new();
        for f in &self.cfg.exposure_steps {
            let t = (base * f).min(max_t);
            if levels
                .last()
                .is_some_and(|l| (l.exptime_s - t).abs() < 1e-6)
            {
                continue;
            }
            let (e, snr, _) = self.error(ctx, &g, t, None)?;
            let frames = self.frames(ctx, t)?;
            levels.push(EpochLevel {
                exptime_s: t,
                frames,
                snr,
                sigma_mas: e.total_mas,
                visit_s: self.visit_s(t, frames),
            });
        }
        Ok(ExposureRule {
            best_rate_exptime_s: best_t,
            min_snr_exptime_s: min_snr,
            levels,
            reference_time: Some(ctx.t),
            target_attenuation_mag: self.attenuation_mag,
        })
    }

    /// A planned epoch at `ctx` of `exptime_s` in `frames` frames.
    #[allow(clippy::too_many_arguments)]
    fn epoch(
        &self,
        ctx: &Context,
        exptime_s: f64,
        frames: u32,
        snr: Option<f64>,
        night: Option<NaiveDate>,
        season: usize,
        visit_s: Option<f64>,
    ) -> Result<PlannedEpoch> {
        let g = self.geometry(ctx)?;
        let (e, snr_t, snr_r) = self.error(ctx, &g, exptime_s, snr)?;
        let (dx, dy) = self.dcr.displacement_mas(g.tan_z, g.q_rad);
        let visit_s = visit_s.unwrap_or_else(|| self.visit_s(exptime_s, frames));
        Ok(PlannedEpoch {
            night,
            season,
            epoch: Epoch {
                time: ctx.t,
                exptime_s,
                n_exposures: frames,
                snr: snr_t,
                airmass: g.airmass,
                visit_s,
                exposures: crate::ladder::BandExposure::single(
                    self.band(),
                    exptime_s,
                    frames,
                    snr_t,
                ),
            },
            pf_ra: g.pf_ra,
            pf_dec: g.pf_dec,
            hour_angle_h: g.ha_h,
            sigma_mas: e.total_mas,
            terms: e,
            reference_snr: snr_r,
            tan_z: g.tan_z,
            parallactic_angle_deg: g.q_rad.to_degrees(),
            dcr_mas: [dx, dy],
        })
    }
}

/// The bias of ϖ (mas) that DCR displacements left in the data give the
/// least-squares fit of `sol`: the parallax element of C Aᵀ W d.
fn dcr_bias_mas(epochs: &[PlannedEpoch], sol: &Solution) -> f64 {
    let (mut n, mut b) = ([[0.0f64; 5]; 5], [0.0f64; 5]);
    for e in epochs {
        super::add_epoch(
            &mut n,
            &mut b,
            1.0 / (e.sigma_mas * e.sigma_mas),
            e.epoch.time.julian_epoch_tt() - sol.ref_epoch_yr,
            [e.pf_ra, e.pf_dec],
            e.dcr_mas,
        );
    }
    (0..5).map(|j| sol.covariance[4][j] * b[j]).sum()
}

fn obs_of(epochs: &[PlannedEpoch]) -> Vec<EpochObs> {
    epochs
        .iter()
        .map(|e| EpochObs {
            t_yr: e.epoch.time.julian_epoch_tt(),
            pf_ra: e.pf_ra,
            pf_dec: e.pf_dec,
            sigma_mas: e.sigma_mas,
        })
        .collect()
}

/// The error terms of a parallax distance, percent of the parallax.
fn parallax_terms(
    plx: f64,
    fit_mas: f64,
    bias_mas: f64,
    abs_mas: f64,
) -> Vec<crate::ladder::ErrorTerm> {
    use crate::ladder::ErrorTerm;
    if !fit_mas.is_finite() {
        return Vec::new();
    }
    let mut v = vec![ErrorTerm::from_pct(
        "parallax fit",
        100.0 * fit_mas / plx,
        false,
    )];
    if bias_mas.abs() > 0.0 {
        v.push(ErrorTerm::from_pct(
            "DCR bias bound",
            100.0 * bias_mas.abs() / plx,
            false,
        ));
    }
    if abs_mas > 0.0 {
        v.push(ErrorTerm::from_pct(
            "relative-to-absolute correction",
            100.0 * abs_mas / plx,
            false,
        ));
    }
    v
}

/// What a goal search keeps between goals of one target: nothing of it
/// depends on the goal (see [`ParallaxMethod::goal_plan`]).
#[derive(Default)]
struct Kept {
    series: Option<Series>,
    slots: Option<Arc<Vec<Slot>>>,
    horizon: Option<Arc<Horizon>>,
    /// The range's candidates at each level (built from the kept slots and
    /// series, nothing of the goal in them).
    cands: Vec<Option<Arc<Vec<Candidate>>>>,
    /// The selections' kept steps (the range's and the horizon's problems).
    memo: select::Memo,
}

/// The range's offered nights continued to the horizon, one instant a night
/// at every exposure level (see `ParallaxMethod::reach`).
struct Horizon {
    /// Whether a whole year of real nights is behind the continuation.
    full_year: bool,
    /// Nights in the horizon.
    horizon_n: usize,
    /// Each night's date.
    dates: Vec<NaiveDate>,
    /// The horizon's seasons (night indices).
    seasons: Vec<Vec<usize>>,
    /// Candidates over the horizon, in night order, per level.
    all: Vec<Vec<Candidate>>,
}

/// Goals of one target asked one after another ([`Method::goal_search`]):
/// the answers of [`ParallaxMethod::goal_plan`], the work that does not
/// depend on the goal done once while the target (but for its goal), the
/// site, the range, the limits and the exposure model stay the same.
pub struct ParallaxGoals<'a> {
    method: &'a ParallaxMethod,
    key: Option<GoalsKey>,
    kept: Kept,
}

/// What [`ParallaxGoals`] keeps its work for.
#[derive(PartialEq)]
struct GoalsKey {
    site: Site,
    target: Target,
    from: NaiveDate,
    to: NaiveDate,
    limits: Limits,
    em: usize,
}

impl<'a> ParallaxGoals<'a> {
    /// A search with nothing kept yet.
    pub fn new(method: &'a ParallaxMethod) -> Self {
        ParallaxGoals {
            method,
            key: None,
            kept: Kept::default(),
        }
    }

    /// [`ParallaxMethod::goal_plan`] of `s`.
    pub fn plan(
        &mut self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
    ) -> Result<ParallaxPlan> {
        let mut target = s.target.clone();
        target.goal_pct = None;
        let key = GoalsKey {
            site: s.site.clone(),
            target,
            from: s.from,
            to: s.to,
            limits: s.limits,
            em: em as *const dyn ExposureModel as *const () as usize,
        };
        if self.key.as_ref() != Some(&key) {
            self.key = Some(key);
            self.kept = Kept::default();
        }
        self.method.goal_plan_kept(s, em, goal_pct, &mut self.kept)
    }
}

impl GoalSearch for ParallaxGoals<'_> {
    fn goal(&mut self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        Ok(self.plan(s, em, goal_pct)?.prediction)
    }
}

/// The candidate instants of a set of nights (a night's earliest, nearest
/// the meridian and latest usable instants, those more than 10 minutes
/// apart), each with its error and visit at every level.
fn slots(
    model: &Model,
    rule: &ExposureRule,
    nights: &[(usize, &NightFactor)],
    one_per_night: bool,
) -> Result<Vec<Slot>> {
    use rayon::prelude::*;
    let exps: Vec<f64> = rule.levels.iter().map(|l| l.exptime_s).collect();
    let mags = [model.observed_mag(), model.frame.mag];
    let per: Vec<Vec<Slot>> = nights
        .par_iter()
        .map(|(i, nf)| -> Result<Vec<Slot>> {
            let Some(best) = nf.best_time else {
                return Ok(Vec::new());
            };
            let mut ts = vec![best];
            if !one_per_night {
                for t in [nf.first_time, nf.last_time].into_iter().flatten() {
                    if ts.iter().all(|x| x.seconds_since(&t).abs() > 600.0) {
                        ts.push(t);
                    }
                }
            }
            let night = Night::shared(model.s.site, nf.night)?;
            ts.iter()
                .map(|t| {
                    let ctx = night.context(*t);
                    // The target observed once, for its geometry and its sky.
                    let seen = ctx.observe(&model.place);
                    let geom = model.geometry_seen(&ctx, &seen)?;
                    // Every level's SNRs at once (the same numbers); on a
                    // refusal, level by level as before, so that the same
                    // refusal is the one returned.
                    let table = model.em.snr_table_seen(
                        &mags,
                        model.band(),
                        &exps,
                        &ctx,
                        &model.place,
                        &seen,
                    );
                    let at = rule
                        .levels
                        .iter()
                        .enumerate()
                        .map(|(k, l)| {
                            let (e, st, sr) = match &table {
                                Ok(t) => model.error_of(&geom, l.exptime_s, t[k][0], t[k][1])?,
                                Err(_) => model.error(&ctx, &geom, l.exptime_s, None)?,
                            };
                            Ok((e, st, sr, l.visit_s))
                        })
                        .collect::<Result<Vec<_>>>()?;
                    Ok(Slot {
                        night: *i,
                        t: *t,
                        geom,
                        at,
                    })
                })
                .collect()
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(per.into_iter().flatten().collect())
}

/// The selection's candidates at one level; `t_of` gives each slot's epoch
/// (Julian year) and `season_of` its season.
fn candidates(
    model: &Model,
    slots: &[Slot],
    level: usize,
    t_of: &dyn Fn(&Slot) -> f64,
    season_of: &dyn Fn(usize) -> usize,
) -> Vec<Candidate> {
    slots
        .iter()
        .map(|sl| {
            let (e, _, _, visit) = sl.at[level];
            let (dx, dy) = model.dcr.displacement_mas(sl.geom.tan_z, sl.geom.q_rad);
            Candidate {
                t_yr: t_of(sl),
                pf_ra: sl.geom.pf_ra,
                pf_dec: sl.geom.pf_dec,
                sigma_mas: e.total_mas,
                dcr_ra_mas: dx,
                dcr_dec_mas: dy,
                hours: visit / 3600.0,
                slot: sl.night,
                season: season_of(sl.night),
            }
        })
        .collect()
}

/// The most epochs a design may hold over `slots` (one a night, at most
/// `cap` a season): every season's nights, up to the cap. A search that adds
/// admissible candidates while any is left (the count-stopped greedy
/// search) stops with exactly this many, or with its count: with each
/// candidate admissible, a season is left either at its cap or with all
/// its nights taken.
fn most_epochs(slots: &[Slot], season_of: &[usize], cap: usize) -> usize {
    let mut nights: Vec<(usize, usize)> = slots
        .iter()
        .map(|sl| (season_of[sl.night], sl.night))
        .collect();
    nights.sort_unstable();
    nights.dedup();
    let mut total = 0;
    let mut at = 0;
    while at < nights.len() {
        let season = nights[at].0;
        let n = nights[at..].iter().take_while(|x| x.0 == season).count();
        total += n.min(cap);
        at += n;
    }
    total
}

/// The fewest hours a design of at least `fewest` epochs at `level` costs,
/// summed as `select::evaluate` sums a design's hours: `fewest` times the
/// cheapest visit (each term of a design is at least that and the rounded
/// sum of non-negative terms only grows with more or larger terms).
///
/// A design the goal search may choose holds at least `fewest` =
/// min(`min_epochs`, [`most_epochs`]) epochs: `choose_kept` returns one of
/// `min_epochs` or more, or tops it up by the count-stopped search (which
/// ends with min(`min_epochs`, most) epochs, see [`most_epochs`]), or
/// returns one that is empty (no baseline: never chosen) or of infinite J
/// (never within the goal).
fn fewest_hours(slots: &[Slot], level: usize, fewest: usize) -> f64 {
    let h = slots
        .iter()
        .map(|sl| sl.at[level].3 / 3600.0)
        .fold(f64::INFINITY, f64::min);
    if h.is_nan() || h < 0.0 {
        // A negative (or no) visit length: no bound.
        return f64::NEG_INFINITY;
    }
    (0..fewest).map(|_| h).sum()
}

/// Which level's candidate list `cands` was cut from (by its first σ).
fn level_of(cands: &[Candidate], all: &[Vec<Candidate>]) -> usize {
    let Some(c) = cands.first() else {
        return all.len().saturating_sub(1);
    };
    all.iter()
        .position(|l| {
            l.iter()
                .any(|x| x.slot == c.slot && x.sigma_mas == c.sigma_mas && x.hours == c.hours)
        })
        .unwrap_or(all.len().saturating_sub(1))
}

fn baseline_of(cands: &[Candidate], d: &Design) -> f64 {
    match (d.chosen.first(), d.chosen.last()) {
        (Some(a), Some(b)) => cands[*b].t_yr - cands[*a].t_yr,
        _ => 0.0,
    }
}

/// The selection with the baseline rule: when the design spans less than
/// `min_baseline_yr` and the candidates allow more, the first and the last
/// night's best candidates are made part of it and it is chosen again.
fn choose(
    cands: &[Candidate],
    max_per_season: usize,
    stop: Stop,
    min_baseline_yr: f64,
    min_epochs: usize,
) -> Design {
    let memo = &mut select::Memo::default();
    choose_kept(
        cands,
        max_per_season,
        stop,
        min_baseline_yr,
        min_epochs,
        memo,
    )
}

/// [`choose`], its selections keeping their work in `memo` for the next
/// goal (the same answers, see [`select::Memo`]).
fn choose_kept(
    cands: &[Candidate],
    max_per_season: usize,
    stop: Stop,
    min_baseline_yr: f64,
    min_epochs: usize,
    memo: &mut select::Memo,
) -> Design {
    let d = choose_baseline(cands, max_per_season, stop, min_baseline_yr, memo);
    if d.chosen.len() >= min_epochs || d.chosen.is_empty() || !d.j().is_finite() {
        return d;
    }
    // Fewer epochs than a plan should hold: add the ones that help most.
    let t_ref = cands.iter().map(|c| c.t_yr).sum::<f64>() / cands.len() as f64;
    let p = Problem {
        cands,
        t_ref,
        max_per_season,
    };
    select::select_with(p, &d.chosen, Stop::Count(min_epochs), memo)
}

fn choose_baseline(
    cands: &[Candidate],
    max_per_season: usize,
    stop: Stop,
    min_baseline_yr: f64,
    memo: &mut select::Memo,
) -> Design {
    if cands.is_empty() {
        return Design {
            chosen: Vec::new(),
            var_mas2: f64::INFINITY,
            bias_mas: 0.0,
            hours: 0.0,
        };
    }
    let t_ref = cands.iter().map(|c| c.t_yr).sum::<f64>() / cands.len() as f64;
    let p = Problem {
        cands,
        t_ref,
        max_per_season,
    };
    let d = select::select_with(p, &[], stop, memo);
    if baseline_of(cands, &d) >= min_baseline_yr {
        return d;
    }
    let by = |f: &dyn Fn(f64, f64) -> bool| {
        (0..cands.len()).reduce(|a, b| {
            let (ca, cb) = (&cands[a], &cands[b]);
            if f(cb.t_yr, ca.t_yr) || (cb.slot == ca.slot && cb.sigma_mas < ca.sigma_mas) {
                b
            } else {
                a
            }
        })
    };
    let first = by(&|x, y| x < y - 1e-3);
    let last = by(&|x, y| x > y + 1e-3);
    match (first, last) {
        (Some(a), Some(b)) if cands[b].t_yr - cands[a].t_yr >= min_baseline_yr => {
            let d2 = select::select_with(p, &[a, b], stop, memo);
            if baseline_of(cands, &d2) >= baseline_of(cands, &d) {
                d2
            } else {
                d
            }
        }
        _ => d,
    }
}

impl ParallaxMethod {
    /// The nights of a series offered to the selection, with their season number.
    fn offered(series: &Series, gap_d: f64) -> (Vec<usize>, Vec<usize>, usize) {
        let seasons = series.seasons(gap_d);
        let mut season_of = vec![usize::MAX; series.nights.len()];
        for (k, se) in seasons.iter().enumerate() {
            for i in se {
                season_of[*i] = k;
            }
        }
        let idx: Vec<usize> = seasons.iter().flatten().copied().collect();
        (idx, season_of, seasons.len())
    }

    /// The reference instant of the exposure rule: the offered night nearest
    /// the middle of the range, at its instant nearest the meridian.
    fn rule_context(&self, s: &Setting, series: &Series, idx: &[usize]) -> Result<Context> {
        let i = idx[idx.len() / 2];
        let nf = &series.nights[i];
        let t = nf
            .best_time
            .ok_or_else(|| RungError::invalid("target", "an offered night without an instant"))?;
        Ok(Night::shared(s.site, nf.night)?.context(t))
    }

    /// Planned epochs from a design.
    #[allow(clippy::too_many_arguments)]
    fn epochs_of(
        &self,
        model: &Model,
        series: &Series,
        slots: &[Slot],
        rule: &ExposureRule,
        level: usize,
        season_of: &[usize],
        d: &Design,
    ) -> Result<Vec<PlannedEpoch>> {
        d.chosen
            .iter()
            .map(|i| {
                let sl = &slots[*i];
                let nf = &series.nights[sl.night];
                let ctx = Night::shared(model.s.site, nf.night)?.context(sl.t);
                let l = &rule.levels[level];
                let (_, snr, _, visit) = sl.at[level];
                model.epoch(
                    &ctx,
                    l.exptime_s,
                    l.frames,
                    Some(snr),
                    Some(nf.night),
                    season_of[sl.night] + 1,
                    Some(visit),
                )
            })
            .collect()
    }

    /// Epochs at a user's instants (the exposure rule's first level).
    pub fn epochs_at(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        times: &[Instant],
    ) -> Result<Vec<PlannedEpoch>> {
        if times.is_empty() {
            return Err(RungError::invalid(
                "epoch list",
                "it is empty: give at least three epochs",
            ));
        }
        let model = Model::new(&self.cfg, s, em)?;
        let rule = model.rule(&Context::exact(s.site, times[0])?)?;
        let l = rule.base().clone();
        times
            .iter()
            .map(|t| {
                let ctx = Context::exact(s.site, *t)?;
                model.epoch(&ctx, l.exptime_s, l.frames, None, None, 0, None)
            })
            .collect()
    }

    /// Planned epochs from shared-face epochs (factors from `epv00`, errors
    /// from the model at their exposure and SNR).
    pub fn planned_from(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: &[Epoch],
    ) -> Result<Vec<PlannedEpoch>> {
        self.planned_at(s, em, epochs, &|t| Context::exact(s.site, t))
    }

    /// [`Self::planned_from`] with each epoch's context from `ctx_of`.
    fn planned_at(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: &[Epoch],
        ctx_of: &dyn Fn(Instant) -> Result<Context>,
    ) -> Result<Vec<PlannedEpoch>> {
        let model = Model::new(&self.cfg, s, em)?;
        epochs
            .iter()
            .map(|e| planned_with(&model, e, &ctx_of(e.time)?))
            .collect()
    }

    /// [`Self::predict`](crate::ladder::Method::predict)'s work on `base`
    /// that an extra epoch does not change (the error model, the base's
    /// planned epochs, the exposure rule at the first epoch, the range's
    /// check), each piece worked out as `predict` works it out. `None` when
    /// `predict` refuses the base before its fit (the caller asks `predict`,
    /// which words the refusal).
    pub(crate) fn shared_base<'a>(
        &'a self,
        s: &'a Setting<'a>,
        em: &'a dyn ExposureModel,
        base: &[Epoch],
    ) -> Option<SharedBase<'a>> {
        let first = base.first()?;
        let plx = expected_parallax_mas(s.target).ok()?;
        let model = Model::new(&self.cfg, s, em).ok()?;
        // The first epoch's exact context serves its planned epoch and the
        // rule (predict works it out twice, the same bits).
        let ctx0 = Context::exact(s.site, first.time).ok()?;
        let planned = base
            .iter()
            .map(|e| {
                if e.time == first.time {
                    planned_with(&model, e, &ctx0)
                } else {
                    planned_with(&model, e, &Context::exact(s.site, e.time)?)
                }
            })
            .collect::<Result<Vec<_>>>()
            .ok()?;
        let rule = model.rule(&ctx0).ok()?;
        let range = self.check_range(s).ok()?;
        Some(SharedBase {
            model,
            planned,
            rule,
            plx,
            range,
        })
    }

    /// [`crate::ladder::Method::predict`] of `base`, then each extra epoch
    /// `extra_for` gives, from one [`SharedBase`] (`predict` itself when the
    /// base is refused: it words the refusal). Each extra's planned epoch
    /// at its exact context (`predict`'s answer, bit for bit), or with
    /// `at_night` at its night's interpolated context (the fill's ranking,
    /// [`crate::ladder::Method::rank_then_each_extra`]).
    pub(crate) fn shared_then_each(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
        at_night: bool,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        let Some(sh) = self.shared_base(s, em, base) else {
            return crate::ladder::predict_then_each_by_one(self, s, em, base, extra_for);
        };
        crate::ladder::then_each(self.shared_prediction(&sh, None), extra_for, |extra| {
            extra
                .iter()
                .map(|e| {
                    if at_night {
                        self.shared_prediction_at_night(&sh, e)
                    } else {
                        self.shared_prediction(&sh, Some(e))
                    }
                })
                .collect()
        })
    }

    /// What [`Self::predict`](crate::ladder::Method::predict) gives for the
    /// base of `sh` followed by `extra` (the base alone for `None`), bit for
    /// bit: the extra's planned epoch at its exact context, then
    /// [`Self::plan_for_with`]'s steps after its rule.
    pub(crate) fn shared_prediction(
        &self,
        sh: &SharedBase,
        extra: Option<&Epoch>,
    ) -> Result<Prediction> {
        let extra = match extra {
            Some(e) => Some(planned_with(
                &sh.model,
                e,
                &Context::exact(sh.model.s.site, e.time)?,
            )?),
            None => None,
        };
        self.shared_prediction_of(sh, extra)
    }

    /// [`Self::shared_prediction`] of the base and `extra` with the extra's
    /// planned epoch at its night's interpolated context
    /// ([`Night::context`]), as the plan's own candidate slots are: the
    /// fill's ranking of a candidate visit, within the last digits of
    /// `predict`'s answer.
    fn shared_prediction_at_night(&self, sh: &SharedBase, extra: &Epoch) -> Result<Prediction> {
        let site = sh.model.s.site;
        let night = Night::shared(site, crate::astro::night::night_of(site, extra.time))?;
        let planned = planned_with(&sh.model, extra, &night.context(extra.time))?;
        self.shared_prediction_of(sh, Some(planned))
    }

    /// The prediction of the base of `sh` followed by `extra`'s planned
    /// epoch: [`Self::plan_for_with`]'s steps after its rule.
    fn shared_prediction_of(
        &self,
        sh: &SharedBase,
        extra: Option<PlannedEpoch>,
    ) -> Result<Prediction> {
        let mut all = Vec::with_capacity(sh.planned.len() + 1);
        all.extend_from_slice(&sh.planned);
        all.extend(extra);
        if all.len() < 3 {
            solve(&obs_of(&all))?;
        }
        Ok(self
            .plan_with_rule(
                sh.model.s,
                &sh.model,
                sh.rule.clone(),
                sh.plx,
                sh.range.clone(),
                0,
                all,
            )?
            .prediction)
    }

    /// The fit of shared-face epochs (a [`Prediction`]'s, as the budget
    /// holds them): each epoch's error evaluated as the plan evaluated it,
    /// at its night's context (`Night::context` of the night that holds
    /// it), then the same least squares, so σϖ, σμ, the correlation and the
    /// baseline are the plan's own numbers to the last bit.
    pub fn fit_of(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: &[Epoch],
    ) -> Result<Solution> {
        let at_night = |t: Instant| -> Result<Context> {
            Ok(Night::shared(s.site, crate::astro::night::night_of(s.site, t))?.context(t))
        };
        solve(&obs_of(&self.planned_at(s, em, epochs, &at_night)?))
    }

    /// The proposed plan: `epochs_per_season` epochs for each season of
    /// offered nights, chosen together to minimise var(ϖ) + bias(ϖ)², at the
    /// exposure rule's first level, and its precision.
    pub fn plan(&self, s: &Setting, em: &dyn ExposureModel) -> Result<ParallaxPlan> {
        let plx = expected_parallax_mas(s.target)?;
        let model = Model::new(&self.cfg, s, em)?;
        let series = self.series(s)?;
        let (idx, season_of, n_seasons) = Self::offered(&series, self.cfg.season_gap_d);
        if idx.is_empty() {
            return Err(RungError::invalid("target", self.no_candidates(s, &series)));
        }
        let rule = model.rule(&self.rule_context(s, &series, &idx)?)?;
        let nights: Vec<(usize, &NightFactor)> =
            idx.iter().map(|i| (*i, &series.nights[*i])).collect();
        let slots = slots(&model, &rule, &nights, false)?;
        let t_of = |sl: &Slot| sl.t.julian_epoch_tt();
        let cands = candidates(&model, &slots, 0, &t_of, &|i| season_of[i]);
        let k = (self.cfg.epochs_per_season as usize * n_seasons).max(self.cfg.min_epochs as usize);
        let d = choose(
            &cands,
            self.cfg.max_epochs_per_season as usize,
            Stop::Count(k),
            self.cfg.min_baseline_yr,
            self.cfg.min_epochs as usize,
        );
        let epochs = self.epochs_of(&model, &series, &slots, &rule, 0, &season_of, &d)?;
        self.finish(
            s,
            &model,
            rule,
            plx,
            series,
            n_seasons,
            epochs,
            None,
            String::new(),
        )
    }

    /// The plan for a user's epochs.
    pub fn plan_for(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: Vec<PlannedEpoch>,
    ) -> Result<ParallaxPlan> {
        self.plan_for_with(s, em, epochs, true, None)
    }

    /// The prediction of [`Self::plan_for`] alone: the same numbers, notes
    /// and refusals, without the range's factor series (a plan shows it,
    /// a prediction does not hold it, and it is most of the work when the
    /// scheduler weighs one visit more). The range is still checked as the
    /// series checks it ([`Self::check_range`]).
    pub fn prediction_for(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: Vec<PlannedEpoch>,
    ) -> Result<Prediction> {
        Ok(self.plan_for_with(s, em, epochs, false, None)?.prediction)
    }

    /// [`crate::ladder::Method::predict`] of `base` followed by each of
    /// `extra` in turn (the scheduler's fill, which weighs one visit more on
    /// each night): the base's epochs and the exposure rule at its first
    /// epoch are worked out once, each extra epoch on its own. Every answer
    /// is the one `predict` gives for `base` then that epoch, bit for bit:
    /// the same per-epoch evaluation (each epoch's is independent of the
    /// others'), the rule at the same first epoch, the same fit. `None` when
    /// the base itself is refused (the caller asks `predict`, which words the
    /// refusal).
    pub fn predict_each_extra_shared(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra: &[Epoch],
    ) -> Option<Vec<Result<Prediction>>> {
        let sh = self.shared_base(s, em, base)?;
        Some(
            extra
                .iter()
                .map(|e| self.shared_prediction(&sh, Some(e)))
                .collect(),
        )
    }

    /// [`Self::plan_for`]; without `with_series` the plan's series is empty
    /// and its season count 0 (nothing of the prediction depends on them).
    /// `rule`: the exposure rule at the first epoch when already worked out
    /// there.
    fn plan_for_with(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        epochs: Vec<PlannedEpoch>,
        with_series: bool,
        rule: Option<ExposureRule>,
    ) -> Result<ParallaxPlan> {
        let plx = expected_parallax_mas(s.target)?;
        if epochs.is_empty() {
            return Err(RungError::invalid(
                "epoch list",
                "it is empty: give at least three epochs",
            ));
        }
        if epochs.len() < 3 {
            // Refuse before the (slow) factor series; `solve` words it.
            solve(&obs_of(&epochs))?;
        }
        let model = Model::new(&self.cfg, s, em)?;
        let rule = match rule {
            Some(r) => r,
            None => model.rule(&Context::exact(s.site, epochs[0].epoch.time)?)?,
        };
        let (series, n) = if with_series {
            let series = self.series(s)?;
            let n = series.seasons(self.cfg.season_gap_d).len();
            (series, n)
        } else {
            (self.check_range(s)?, 0)
        };
        self.plan_with_rule(s, &model, rule, plx, series, n, epochs)
    }

    /// [`Self::plan_for_with`] after its checks, with the model, the rule
    /// and the series in hand: the note on epochs outside the meridian and
    /// airmass limits, and the fit.
    #[allow(clippy::too_many_arguments)]
    fn plan_with_rule(
        &self,
        s: &Setting,
        model: &Model,
        rule: ExposureRule,
        plx: f64,
        series: Series,
        n: usize,
        epochs: Vec<PlannedEpoch>,
    ) -> Result<ParallaxPlan> {
        let outside: Vec<String> = epochs
            .iter()
            .filter(|e| {
                e.hour_angle_h.abs() > self.cfg.ha_limit_h || e.epoch.airmass > self.cfg.max_airmass
            })
            .map(|e| e.epoch.time.round_to_second().iso())
            .collect();
        let mut plan = self.finish(s, model, rule, plx, series, n, epochs, None, String::new())?;
        if !outside.is_empty() {
            plan.prediction.notes.push(format!(
                "{} epoch(s) lie outside ±{:.1} h of the meridian or above airmass {:.2} (DCR grows with tan z): {}",
                outside.len(),
                self.cfg.ha_limit_h,
                self.cfg.max_airmass,
                outside.join(", ")
            ));
        }
        Ok(plan)
    }

    #[allow(clippy::too_many_arguments)]
    fn finish(
        &self,
        s: &Setting,
        model: &Model,
        rule: ExposureRule,
        plx: f64,
        series: Series,
        seasons_available: usize,
        epochs: Vec<PlannedEpoch>,
        verdict: Option<Verdict>,
        reason: String,
    ) -> Result<ParallaxPlan> {
        let sol = solve(&obs_of(&epochs))?;
        let bias = dcr_bias_mas(&epochs, &sol);
        let abs = self.cfg.absolute_correction_mas;
        let total = (sol.sigma_parallax_mas.powi(2) + bias * bias + abs * abs).sqrt();
        let pct = 100.0 * total / plx;
        let hours = epochs.iter().map(|e| e.epoch.visit_s).sum::<f64>() / 3600.0;
        let mut notes = self.notes(model, plx, &sol, bias, pct);
        let mut reason = reason;
        let verdict = match verdict {
            Some(v) => v,
            None => match s.target.goal_pct {
                Some(g) if pct > g => {
                    reason = format!(
                        "these epochs give {pct:.1} %, short of the goal of {g:.1} %: see goal mode"
                    );
                    notes.push(reason.clone());
                    Verdict::NeedsMoreSeasons { seasons: None }
                }
                Some(_) if sol.baseline_yr < self.cfg.min_baseline_yr => {
                    reason = format!(
                        "the baseline is {:.2} yr, under the {:.1} yr parallax and proper motion need to separate (min_baseline_yr)",
                        sol.baseline_yr, self.cfg.min_baseline_yr
                    );
                    notes.push(reason.clone());
                    Verdict::NeedsMoreSeasons { seasons: None }
                }
                _ if pct.is_finite() => Verdict::Reachable,
                _ => Verdict::NeedsMoreSeasons { seasons: None },
            },
        };
        if reason.is_empty() {
            reason = format!(
                "{} epochs over {:.2} yr give σϖ {total:.2} mas ({pct:.1} %)",
                sol.n_epochs, sol.baseline_yr
            );
        }
        let prediction = Prediction {
            kind: Kind::Parallax,
            epochs: epochs.iter().map(|e| e.epoch.clone()).collect(),
            distance_precision_pct: pct,
            hours_needed: hours,
            verdict,
            notes,
            error_terms: parallax_terms(plx, sol.sigma_parallax_mas, bias, abs),
        };
        let place = s.target.place();
        Ok(ParallaxPlan {
            parallax_mas: plx,
            ellipse: parallactic_ellipse(place.ra_rad, place.dec_rad, plx),
            series,
            seasons_available,
            epochs,
            solution: Some(sol),
            prediction,
            reach: None,
            reference: model.frame.clone(),
            dcr: model.dcr,
            exposure_rule: rule,
            dcr_bias_mas: Some(bias),
            absolute_correction_mas: abs,
            sigma_parallax_total_mas: Some(total),
            min_baseline_yr: self.cfg.min_baseline_yr,
            verdict_reason: reason,
        })
    }

    fn notes(&self, model: &Model, plx: f64, sol: &Solution, bias: f64, pct: f64) -> Vec<String> {
        let mut notes = model.notes.clone();
        if pct > self.cfg.lutz_kelker_pct {
            notes.push(format!(
                "σ_ϖ/ϖ = {pct:.1} % exceeds {:.0} %: 1/ϖ is a biased distance estimate (Lutz & Kelker 1973); do not quote it as the distance",
                self.cfg.lutz_kelker_pct
            ));
        }
        if sol.corr_parallax_pm.abs() > 0.7 || sol.baseline_yr < self.cfg.min_baseline_yr {
            notes.push(format!(
                "baseline {:.2} yr, parallax–proper-motion correlation {:+.2}: proper motion and parallax separate only over about {:.0} years or more",
                sol.baseline_yr, sol.corr_parallax_pm, self.cfg.min_baseline_yr
            ));
        }
        notes.push(format!(
            "σ_ϖ = {:.2} mas for ϖ = {plx:.2} mas from {} epochs; DCR bias bound {:.2} mas (DCR {:+.1} mas per tan z, left uncorrected), relative-to-absolute correction {:.2} mas",
            sol.sigma_parallax_mas,
            sol.n_epochs,
            bias.abs(),
            model.dcr.mas_per_tanz,
            self.cfg.absolute_correction_mas
        ));
        notes
    }

    /// Goal mode: the plan with the fewest telescope hours that reaches
    /// `goal_pct` = 100 σ/ϖ, σ the fit's σϖ, the DCR bias and the absolute
    /// correction in quadrature, over a baseline of at least
    /// `min_baseline_yr`, trying each exposure level; or the verdict that
    /// says why not.
    ///
    /// Why not is one test, [`Reach`]: the range's offered nights continued
    /// year by year to [`HORIZON_YEARS`], at the longest exposure level, and
    /// the same selection run on their first k seasons: the fewest k that
    /// reach the goal with the baseline is the season count; when even the
    /// whole horizon does not, its best is the floor. The range itself is
    /// searched first, by the same selection, so rung never says "needs more
    /// seasons" or "floor" when a plan it can make in the range reaches the goal.
    pub fn goal_plan(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
    ) -> Result<ParallaxPlan> {
        self.goal_plan_kept(s, em, goal_pct, &mut Kept::default())
    }

    /// [`Self::goal_plan`], keeping in `kept` what does not depend on the
    /// goal (the series, the range's candidate instants, the horizon's
    /// candidates) for the next goal of the same target, range, limits and
    /// exposure model (the caller's promise: [`ParallaxGoals`] keeps it).
    fn goal_plan_kept(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        goal_pct: f64,
        kept: &mut Kept,
    ) -> Result<ParallaxPlan> {
        if !(goal_pct.is_finite() && goal_pct > 0.0) {
            return Err(RungError::invalid(
                "distance-precision goal",
                format!("{goal_pct} % must be positive"),
            ));
        }
        let plx = expected_parallax_mas(s.target)?;
        target_mag(s.target)?;
        let series = match &kept.series {
            Some(x) => x.clone(),
            None => {
                let x = self.series(s)?;
                kept.series = Some(x.clone());
                x
            }
        };
        let (idx, season_of, n_seasons) = Self::offered(&series, self.cfg.season_gap_d);
        let place = s.target.place();
        let ellipse = parallactic_ellipse(place.ra_rad, place.dec_rad, plx);
        let abs = self.cfg.absolute_correction_mas;
        let empty = |verdict: Verdict,
                     notes: Vec<String>,
                     series: Series,
                     n: usize,
                     model: Option<&Model>,
                     rule: Option<ExposureRule>,
                     reason: String| ParallaxPlan {
            parallax_mas: plx,
            ellipse,
            series,
            seasons_available: n,
            epochs: Vec::new(),
            solution: None,
            prediction: Prediction {
                kind: Kind::Parallax,
                epochs: Vec::new(),
                distance_precision_pct: f64::INFINITY,
                hours_needed: 0.0,
                verdict,
                notes,
                error_terms: Vec::new(),
            },
            reach: None,
            reference: model.map(|m| m.frame.clone()).unwrap_or(ReferenceFrame {
                count: 0.0,
                count_source: Source::Estimated,
                mag: f64::NAN,
                mag_source: Source::Estimated,
                color_vi_mag: f64::NAN,
                color_source: Source::Estimated,
                separation_arcsec: 0.0,
                galactic_lat_deg: f64::NAN,
            }),
            dcr: model.map(|m| m.dcr).unwrap_or(Dcr {
                band_lambda_angstrom: 0.0,
                target_lambda_angstrom: 0.0,
                reference_lambda_angstrom: 0.0,
                mas_per_tanz: 0.0,
            }),
            exposure_rule: rule.unwrap_or(ExposureRule {
                best_rate_exptime_s: 0.0,
                min_snr_exptime_s: None,
                levels: Vec::new(),
                reference_time: None,
                target_attenuation_mag: model.map_or(0.0, |m| m.attenuation_mag),
            }),
            dcr_bias_mas: None,
            absolute_correction_mas: abs,
            sigma_parallax_total_mas: None,
            min_baseline_yr: self.cfg.min_baseline_yr,
            verdict_reason: reason,
        };
        if idx.is_empty() {
            let why = self.no_candidates(s, &series);
            let when = series
                .nights
                .iter()
                .find(|n| n.observable)
                .map(|n| format!("observable from {} but at a small parallax factor", n.night));
            return Ok(empty(
                Verdict::NotObservable { when },
                vec![why.clone()],
                series,
                0,
                None,
                None,
                why,
            ));
        }
        let model = match Model::new(&self.cfg, s, em) {
            Ok(m) => m,
            Err(e @ RungError::Invalid { .. }) => {
                let why = e.to_string();
                return Ok(empty(
                    Verdict::NotObservable {
                        when: Some("no usable reference frame".into()),
                    },
                    vec![why.clone()],
                    series,
                    n_seasons,
                    None,
                    None,
                    why,
                ));
            }
            Err(e) => return Err(e),
        };
        let need = goal_pct / 100.0 * plx;
        if abs >= need {
            let fp = 100.0 * abs / plx;
            let why = format!(
                "the correction from relative to absolute parallax alone ({abs:.2} mas, absolute_correction_mas) is {fp:.1} % of ϖ, above the goal of {goal_pct:.1} %"
            );
            return Ok(empty(
                Verdict::LimitedByFloor { floor_pct: fp },
                vec![why.clone()],
                series,
                n_seasons,
                Some(&model),
                None,
                why,
            ));
        }
        let target_j = need * need - abs * abs;
        let rule = match self
            .rule_context(s, &series, &idx)
            .and_then(|c| model.rule(&c))
        {
            Ok(r) => r,
            Err(e) => {
                let why = format!("the exposure model refuses its epochs: {e}");
                return Ok(empty(
                    Verdict::NotObservable {
                        when: Some("the exposure model refuses its epochs".into()),
                    },
                    vec![why.clone()],
                    series,
                    n_seasons,
                    Some(&model),
                    None,
                    why,
                ));
            }
        };
        let nights: Vec<(usize, &NightFactor)> =
            idx.iter().map(|i| (*i, &series.nights[*i])).collect();
        let slots = match &kept.slots {
            Some(x) => x.clone(),
            None => {
                let x = Arc::new(slots(&model, &rule, &nights, false)?);
                kept.slots = Some(x.clone());
                x
            }
        };
        let t_of = |sl: &Slot| sl.t.julian_epoch_tt();
        let cap = self.cfg.max_epochs_per_season as usize;
        let minb = self.cfg.min_baseline_yr;
        // The range: each level, the fewest hours that reach the goal.
        let mut best: Option<(f64, usize, Design, Vec<Candidate>)> = None;
        let mut range_best: Option<(f64, f64)> = None; // J, baseline
        let fewest = (self.cfg.min_epochs as usize).min(most_epochs(&slots, &season_of, cap));
        for level in 0..rule.levels.len() {
            // A level whose every design that may be chosen costs at least
            // the best one's hours cannot be chosen (a design must cost
            // fewer): it is not searched (see `fewest_hours`). `range_best`
            // is read only when no level is chosen, so it may miss it.
            if best
                .as_ref()
                .is_some_and(|x| fewest_hours(&slots, level, fewest) >= x.0)
            {
                continue;
            }
            if kept.cands.len() <= level {
                kept.cands.resize_with(level + 1, || None);
            }
            let cands = match &kept.cands[level] {
                Some(x) => x.clone(),
                None => {
                    let x = Arc::new(candidates(&model, &slots, level, &t_of, &|i| season_of[i]));
                    kept.cands[level] = Some(x.clone());
                    x
                }
            };
            let d = choose_kept(
                &cands,
                cap,
                Stop::Target(target_j),
                minb,
                self.cfg.min_epochs as usize,
                &mut kept.memo,
            );
            let b = baseline_of(&cands, &d);
            if range_best.is_none_or(|r| d.j() < r.0) {
                range_best = Some((d.j(), b));
            }
            if d.j() <= target_j && b >= minb - 1e-9 && best.as_ref().is_none_or(|x| d.hours < x.0)
            {
                best = Some((d.hours, level, d, cands.to_vec()));
            }
        }
        if let Some((_, level, d, cands)) = best {
            let epochs = self.epochs_of(&model, &series, &slots, &rule, level, &season_of, &d)?;
            let l = &rule.levels[level];
            let reason = format!(
                "{} epochs of {:.0} s ({} frame(s)) over {:.2} yr reach the goal of {goal_pct:.1} %",
                epochs.len(),
                l.exptime_s,
                l.frames,
                baseline_of(&cands, &d)
            );
            let mut plan = self.finish(
                s,
                &model,
                rule,
                plx,
                series,
                n_seasons,
                epochs,
                Some(Verdict::Reachable),
                reason.clone(),
            )?;
            plan.prediction.notes.insert(
                0,
                format!(
                    "goal {goal_pct:.1} %: {reason}: {:.2} % in {:.2} h",
                    plan.prediction.distance_precision_pct, plan.prediction.hours_needed
                ),
            );
            return Ok(plan);
        }
        // Why not: the nights continued year by year to the horizon.
        let (mut reach, share, share_level) =
            self.reach(s, &model, &rule, &series, &slots, target_j, kept)?;
        reach.range_seasons = n_seasons;
        if let Some((j, b)) = range_best {
            reach.range_best_pct = j.is_finite().then(|| 100.0 * (j + abs * abs).sqrt() / plx);
            reach.range_baseline_yr = Some(b);
        }
        let lvl = rule
            .levels
            .last()
            .map(|l| (l.exptime_s, l.frames))
            .unwrap_or((0.0, 0));
        let per_epoch = format!(
            "at {:.0} s per epoch ({} frame(s), the longest level) with the error model of docs/science.md",
            lvl.0, lvl.1
        );
        let range_best_txt = match (reach.range_best_pct, reach.range_baseline_yr) {
            (Some(p), Some(b)) => format!(
                "the range's {n_seasons} season(s) reach at best {p:.1} % over a {b:.2} yr baseline"
            ),
            _ => format!(
                "the range's {} candidate instant(s) cannot fit position, proper motion and parallax",
                slots.len()
            ),
        };
        let span_yr = (s.to - s.from).num_days() as f64 / 365.25 + 1.0 / 365.25;
        let mut notes = model.notes.clone();
        let met_in_range_but_short = reach.range_best_pct.is_some_and(|p| p <= goal_pct)
            && reach.range_baseline_yr.is_some_and(|b| b < minb);
        if span_yr < minb || met_in_range_but_short {
            notes.push(format!(
                "the range {}..{} ({span_yr:.1} yr) is shorter than the {minb:.1} yr baseline parallax and proper motion need to separate (min_baseline_yr): a longer range is needed for a reachable plan",
                s.from, s.to
            ));
        }
        if !reach.full_year {
            notes.push(
                "the range covers less than a year and the nights after it are outside rung's span, so the other season of each year is not counted: give a range of two years or more".to_string(),
            );
        }
        let horizon = format!(
            "{} season(s) in the {:.0} years from {}",
            reach.horizon_seasons, reach.horizon_yr, s.from
        );
        let (verdict, reason) = match (reach.seasons_needed, reach.floor_pct) {
            (Some(n), Some(fp)) => {
                let by = reach
                    .reached_by
                    .map(|d| {
                        format!(
                            ", through about {d} ({:.1} years from {})",
                            ((d - s.from).num_days() + 1) as f64 / 365.25,
                            s.from
                        )
                    })
                    .unwrap_or_default();
                let why = if met_in_range_but_short {
                    format!(
                        "{range_best_txt}: the goal, but under the {minb:.1} yr baseline; {n} season(s) in all would do{by}"
                    )
                } else {
                    format!(
                        "{range_best_txt}, short of {goal_pct:.1} %; {n} season(s) in all would reach it{by}"
                    )
                };
                notes.push(format!("{per_epoch}, {why} ({horizon} reach {fp:.1} %)"));
                (
                    Verdict::NeedsMoreSeasons {
                        seasons: Some(n as u32),
                    },
                    why,
                )
            }
            (None, Some(fp)) => {
                let why = format!(
                    "even continued year by year, {horizon} reach at best {fp:.1} %, short of {goal_pct:.1} %"
                );
                notes.push(format!(
                    "{per_epoch}, {range_best_txt}; {why}: the floor and the relative-to-absolute correction do not average away"
                ));
                (Verdict::LimitedByFloor { floor_pct: fp }, why)
            }
            (_, None) => {
                let why = format!(
                    "even continued year by year over {horizon}, these nights cannot separate position, proper motion and parallax"
                );
                notes.push(format!(
                    "{per_epoch}, {range_best_txt}; {why}: lower factor_fraction or widen the hour-angle limit"
                ));
                (Verdict::NeedsMoreSeasons { seasons: None }, why)
            }
        };
        notes.insert(0, format!("{}: {reason}", verdict.text()));
        // When more seasons would do, the plan shows the range's share of
        // the plan that reaches the goal: its epochs, hours and what they
        // give on their own.
        let level = share_level;
        let share: Vec<PlannedEpoch> = share
            .iter()
            .filter_map(|j| {
                let nf = &series.nights[*j];
                let sl = slots
                    .iter()
                    .find(|sl| sl.night == *j && Some(sl.t) == nf.best_time)?;
                let l = &rule.levels[level];
                let ctx = Night::shared(s.site, nf.night).ok()?.context(sl.t);
                let (_, snr, _, visit) = sl.at[level];
                model
                    .epoch(
                        &ctx,
                        l.exptime_s,
                        l.frames,
                        Some(snr),
                        Some(nf.night),
                        season_of[*j].wrapping_add(1),
                        Some(visit),
                    )
                    .ok()
            })
            .collect();
        if share.len() >= 3 {
            let rule2 = rule.clone();
            if let Ok(mut plan) = self.finish(
                s,
                &model,
                rule2,
                plx,
                series.clone(),
                n_seasons,
                share,
                Some(verdict.clone()),
                reason.clone(),
            ) {
                let own = plan.prediction.notes.pop();
                notes.push(format!(
                    "the epochs shown are the range's share of that plan ({} epochs, {:.1} h); on their own they give {:.1} %",
                    plan.epochs.len(),
                    plan.prediction.hours_needed,
                    plan.prediction.distance_precision_pct
                ));
                notes.extend(own);
                plan.prediction.notes = notes;
                plan.reach = Some(reach);
                return Ok(plan);
            }
        }
        let mut plan = empty(
            verdict,
            notes,
            series,
            n_seasons,
            Some(&model),
            Some(rule),
            reason,
        );
        plan.reach = Some(reach);
        Ok(plan)
    }

    /// How far the range's offered nights go toward J ≤ `target_j` when they
    /// are continued year by year to [`HORIZON_YEARS`] from the range start,
    /// at the longest exposure level, one instant a night (the one nearest
    /// the meridian).
    ///
    /// Beyond the range, night j repeats the night a whole number of 365-day
    /// years earlier within the range's last year (its factors, geometry,
    /// errors and candidacy), its epoch moved by the same number of days: the
    /// factors repeat with the year to about 1e-2 au. A range shorter than a
    /// year is first completed to a year with real nights.
    /// The range's offered nights continued year by year to
    /// [`HORIZON_YEARS`] (see [`Self::reach`]): what the reach of a goal
    /// searches, which does not depend on the goal.
    fn horizon(
        &self,
        s: &Setting,
        model: &Model,
        rule: &ExposureRule,
        series: &Series,
        range_slots: &[Slot],
    ) -> Result<Horizon> {
        let gap = self.cfg.season_gap_d;
        // Real nights to a full year.
        let mut nights = series.nights.clone();
        let mut full_year = nights.len() >= YEAR_NIGHTS;
        if !full_year {
            let place = s.target.place();
            let lim = self.effective_limits(s);
            let dates: Vec<NaiveDate> = (nights.len()..YEAR_NIGHTS)
                .filter_map(|i| s.from.checked_add_days(chrono::Days::new(i as u64)))
                .collect();
            use rayon::prelude::*;
            let more = dates
                .par_iter()
                .map(|d| {
                    let night = Night::shared(s.site, *d)?;
                    self.night_factor(&night, &place, &lim, series.threshold)
                })
                .collect::<Result<Vec<_>>>();
            match more {
                Ok(more) => {
                    nights.extend(more);
                    full_year = true;
                }
                Err(RungError::OutOfSpan { .. }) => {}
                Err(e) => return Err(e),
            }
        }
        let n_real = nights.len();
        // One slot per real night (nearest the meridian), reusing the range's.
        let mut real: Vec<Option<Slot>> = vec![None; n_real];
        for sl in range_slots {
            let nf = &series.nights[sl.night];
            if Some(sl.t) == nf.best_time && real[sl.night].is_none() {
                real[sl.night] = Some(sl.clone());
            }
        }
        let missing: Vec<(usize, &NightFactor)> = (0..n_real)
            .filter(|i| real[*i].is_none() && nights[*i].candidate)
            .map(|i| (i, &nights[i]))
            .collect();
        for sl in slots(model, rule, &missing, true)? {
            let i = sl.night;
            real[i] = Some(sl);
        }
        let horizon_n = n_real.max((HORIZON_YEARS * 365.25).round() as usize);
        let mut t_yr: Vec<f64> = nights
            .iter()
            .map(|n| n.best_time.map(|t| t.julian_epoch_tt()).unwrap_or(f64::NAN))
            .collect();
        let mut src_of: Vec<usize> = (0..n_real).collect();
        for j in n_real..horizon_n {
            let c = (j - n_real) / YEAR_NIGHTS + 1;
            let Some(src) = j.checked_sub(c * YEAR_NIGHTS) else {
                continue;
            };
            let Some(date) = s.from.checked_add_days(chrono::Days::new(j as u64)) else {
                break;
            };
            let mut nf = nights[src].clone();
            nf.night = date;
            nf.best_time = None;
            nf.first_time = None;
            nf.last_time = None;
            nights.push(nf);
            t_yr.push(t_yr[src] + (c * YEAR_NIGHTS) as f64 / 365.25);
            src_of.push(src);
        }
        let ext = Series {
            nights,
            yearly_extreme: series.yearly_extreme,
            threshold: series.threshold,
            axis: series.axis,
        };
        let ext_seasons = ext.seasons(gap);
        let mut season_of = vec![usize::MAX; ext.nights.len()];
        for (k, se) in ext_seasons.iter().enumerate() {
            for i in se {
                season_of[*i] = k;
            }
        }
        // Candidates over the horizon, in night order, at every level.
        let nlev = rule.levels.len();
        let mut all: Vec<Vec<Candidate>> = vec![Vec::new(); nlev];
        for (j, src) in src_of.iter().enumerate() {
            if season_of[j] == usize::MAX {
                continue;
            }
            let Some(sl) = real[*src].as_ref() else {
                continue;
            };
            for (l, out) in all.iter_mut().enumerate() {
                let mut c = candidates(model, std::slice::from_ref(sl), l, &|_| t_yr[j], &|_| {
                    season_of[j]
                });
                c[0].slot = j;
                out.extend(c);
            }
        }
        Ok(Horizon {
            full_year,
            horizon_n,
            dates: ext.nights.iter().map(|n| n.night).collect(),
            seasons: ext_seasons,
            all,
        })
    }

    #[allow(clippy::too_many_arguments)]
    fn reach(
        &self,
        s: &Setting,
        model: &Model,
        rule: &ExposureRule,
        series: &Series,
        range_slots: &[Slot],
        target_j: f64,
        kept: &mut Kept,
    ) -> Result<(Reach, Vec<usize>, usize)> {
        let level = rule.levels.len() - 1;
        let plx = expected_parallax_mas(s.target)?;
        let abs = self.cfg.absolute_correction_mas;
        let gap = self.cfg.season_gap_d;
        let minb = self.cfg.min_baseline_yr;
        let h = match &kept.horizon {
            Some(h) => h.clone(),
            None => {
                let h = Arc::new(self.horizon(s, model, rule, series, range_slots)?);
                kept.horizon = Some(h.clone());
                h
            }
        };
        let Horizon {
            full_year,
            horizon_n,
            dates: ref ext_dates,
            seasons: ref ext_seasons,
            ref all,
        } = *h;
        let nlev = rule.levels.len();
        let cap = self.cfg.max_epochs_per_season as usize;
        // Each (seasons, level) is searched once: the bisection's last
        // answer is asked again for the cheapest level.
        type Met = (bool, Design, Vec<Candidate>);
        let memo: std::cell::RefCell<Vec<((usize, usize), Met)>> = Default::default();
        let sel = std::cell::RefCell::new(&mut kept.memo);
        let met_at = |k: usize, l: usize| -> Met {
            if let Some((_, m)) = memo.borrow().iter().find(|(key, _)| *key == (k, l)) {
                return m.clone();
            }
            let cands: Vec<Candidate> = all[l].iter().filter(|c| c.season < k).cloned().collect();
            let d = choose_kept(
                &cands,
                cap,
                Stop::Target(target_j),
                minb,
                self.cfg.min_epochs as usize,
                &mut sel.borrow_mut(),
            );
            let ok = d.j() <= target_j && baseline_of(&cands, &d) >= minb - 1e-9;
            memo.borrow_mut()
                .push(((k, l), (ok, d.clone(), cands.clone())));
            (ok, d, cands)
        };
        let met = |k: usize| met_at(k, level);
        let nseas = ext_seasons.len();
        let (ok_all, d_all, _) = met(nseas);
        let floor = d_all
            .j()
            .is_finite()
            .then(|| 100.0 * (d_all.j() + abs * abs).sqrt() / plx);
        let range_seasons = series.seasons(gap).len();
        let mut seasons_needed = None;
        let mut reached_by = None;
        let mut in_range = Vec::new();
        let mut share_level = level;
        if ok_all {
            // The fewest seasons that reach it (more seasons only add
            // candidates, so the answer is searched by bisection). The
            // answer is most often the first season after the range (a
            // range that meets the goal but is short of the baseline), so
            // the search gallops up from there first (range + 1, + 2,
            // + 4, ...) and bisects only the last gap: the same answer
            // with one selection instead of about log2(horizon seasons).
            let (mut lo, mut hi) = (range_seasons + 1, nseas);
            let mut step = 0;
            while lo + step < hi {
                if met(lo + step).0 {
                    hi = lo + step;
                    break;
                }
                lo += step + 1;
                step = if step == 0 { 1 } else { 2 * step };
            }
            while lo < hi {
                let mid = (lo + hi) / 2;
                if met(mid).0 {
                    hi = mid;
                } else {
                    lo = mid + 1;
                }
            }
            let k = lo.min(nseas).max(1);
            seasons_needed = Some(k);
            // The cheapest plan of those k seasons (each level), and its
            // part inside the range: the range's share.
            let (_, d, cands) = (0..nlev)
                .map(|l| met_at(k, l))
                .filter(|x| x.0)
                .min_by(|a, b| a.1.hours.total_cmp(&b.1.hours))
                .unwrap_or_else(|| met(k));
            share_level = level_of(&cands, all);
            in_range = d
                .chosen
                .iter()
                .map(|i| cands[*i].slot)
                .filter(|j| *j < series.nights.len())
                .collect();
            reached_by = ext_seasons
                .get(k - 1)
                .and_then(|se| se.last())
                .map(|i| ext_dates[*i]);
        }
        let l = &rule.levels[level];
        let reach = Reach {
            snr: l.snr,
            exptime_s: l.exptime_s,
            range_seasons,
            range_best_pct: None,
            range_corr_parallax_pm: None,
            horizon_yr: horizon_n as f64 / 365.25,
            horizon_seasons: nseas,
            floor_pct: floor,
            seasons_needed,
            reached_by,
            full_year,
            range_baseline_yr: None,
        };
        Ok((reach, in_range, share_level))
    }
}
