//! The distance methods, one module each, all with the same face.
//!
//! Given a target, a site, an exposure model and a date range, a method
//! proposes epochs; given epochs it predicts the distance precision they buy;
//! given a goal it says what it takes or why it cannot. The budget and the
//! scheduler use only this face ([`Method`]), so a fourth method is a new file
//! plus one line in [`methods`].

pub mod chain;
pub mod field;
pub mod parallax;
pub mod pulsator;
pub mod transient;

use crate::astro::frames::{CatalogPlace, Context, Observed};
use crate::astro::night::Limits;
use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::error::Result;
use crate::io::targets::{Kind, Target};
use chrono::NaiveDate;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::Arc;

/// What the photometry model offers the methods: signal-to-noise and exposure
/// time for a star at a place and instant (sky brightness, airmass and the Moon
/// taken from the context). Implemented by `crate::photometry`.
pub trait ExposureModel: Sync {
    /// Signal-to-noise reached on a point source of magnitude `mag` in `band`
    /// with a total exposure of `exptime_s` seconds.
    fn snr(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<f64>;
    /// Total exposure time (s) and number of sub-exposures (split to avoid
    /// saturation) that reach `snr`.
    fn exptime(
        &self,
        mag: f64,
        band: &str,
        snr: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<(f64, u32)>;
    /// Overhead per visit (slew, acquisition), seconds.
    fn visit_overhead_s(&self) -> f64;
    /// Overhead per sub-exposure (readout), seconds.
    fn readout_s(&self) -> f64;
    /// Typical seeing FWHM, arcseconds.
    fn seeing_fwhm_arcsec(&self) -> f64;
    /// Clear aperture of the telescope, metres, when the model knows it (the
    /// parallax method scales atmospheric image motion with it). The default
    /// knows none.
    fn aperture_m(&self) -> Option<f64> {
        None
    }
    /// Effective wavelength and width (FWHM) of a band, Å: the model's own
    /// band table. The default reads the built-in table (`config/bands.toml`).
    fn passband_angstrom(&self, band: &str) -> Option<(f64, f64)> {
        let set = crate::sky::bands::BandSet::builtin().ok()?;
        let b = set.get(band).ok()?;
        Some((b.lambda_eff_angstrom, b.bandwidth_angstrom))
    }

    /// The camera's field of view, arcmin: [width along right ascension,
    /// height along declination]; `None` when the model does not know it
    /// (a field then cannot tell which stars one pointing serves).
    fn fov_arcmin(&self) -> Option<[f64; 2]> {
        None
    }
    /// Outer radius of the photometry's sky annulus, arcsec: a star of a
    /// field is measured in a pointing only this far inside the field's
    /// edges. The default: 5 seeing FWHM.
    fn annulus_outer_arcsec(&self) -> f64 {
        5.0 * self.seeing_fwhm_arcsec()
    }
    /// Sub-exposures a star of magnitude `mag` needs in a total `exptime_s`
    /// to stay within the detector's linear range (a field visit is split for
    /// its brightest star). The default: one.
    fn frames_for(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<u32> {
        let _ = (mag, band, exptime_s, ctx, place);
        Ok(1)
    }
    /// [`Self::snr`] of each star of `mags` at each exposure of
    /// `exptimes`, all at one instant: `out[k][m]` the SNR of `mags[m]` in
    /// `exptimes[k]`, asked in that order (exposure by exposure, star by
    /// star), the first refusal returned. The same numbers as asking one by
    /// one, which the default does; a model may share the work that does
    /// not depend on the exposure (the sky, the star's rates).
    fn snr_table(
        &self,
        mags: &[f64],
        band: &str,
        exptimes: &[f64],
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<Vec<Vec<f64>>> {
        exptimes
            .iter()
            .map(|t| {
                mags.iter()
                    .map(|m| self.snr(*m, band, *t, ctx, place))
                    .collect()
            })
            .collect()
    }
    /// [`Self::snr_table`] with `seen`, the target's observed place through
    /// `ctx` (`ctx.observe(place)`), already known to the caller: the same
    /// answers. The default asks [`Self::snr_table`].
    fn snr_table_seen(
        &self,
        mags: &[f64],
        band: &str,
        exptimes: &[f64],
        ctx: &Context,
        place: &CatalogPlace,
        seen: &Observed,
    ) -> Result<Vec<Vec<f64>>> {
        let _ = seen;
        self.snr_table(mags, band, exptimes, ctx, place)
    }
    /// Signal-to-noise on a star of magnitude `mag` in a total `exptime_s`
    /// split into `n_frames` sub-exposures chosen for another star (each frame
    /// adds read noise). The default ignores the split: [`Self::snr`].
    fn snr_in_frames(
        &self,
        mag: f64,
        band: &str,
        exptime_s: f64,
        n_frames: u32,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<f64> {
        let _ = n_frames;
        self.snr(mag, band, exptime_s, ctx, place)
    }
    /// Exposure of a long-slit spectrum of a point source of magnitude `mag`
    /// in `band` reaching `snr` per resolution element at
    /// `wavelength_angstrom` (a transient's classification spectrum). The
    /// default refuses: an exposure model without a spectrograph.
    fn spectrum_exptime(
        &self,
        mag: f64,
        band: &str,
        snr: f64,
        wavelength_angstrom: f64,
        ctx: &Context,
        place: &CatalogPlace,
    ) -> Result<SpectrumExposure> {
        let _ = (mag, band, snr, wavelength_angstrom, ctx, place);
        Err(crate::error::RungError::invalid(
            "spectrograph",
            "this exposure model has no spectrograph",
        ))
    }
    /// Time to change filters between the bands of one visit, seconds, when
    /// the instrument profile gives it (a method falls back on its own
    /// configuration otherwise). The default gives none.
    fn filter_change_s(&self) -> Option<f64> {
        None
    }
}

/// The exposure of a spectrum in a visit (a transient's classification).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpectrumExposure {
    /// Spectrograph name.
    pub spectrograph: String,
    /// Total exposure, seconds.
    pub exptime_s: f64,
    /// Number of sub-exposures.
    pub n_exposures: u32,
    /// Signal-to-noise per resolution element.
    pub snr_per_resolution_element: f64,
    /// Resolving power λ/Δλ.
    pub resolution: f64,
    /// Width of a resolution element at the wavelength asked, Å.
    pub resolution_element_angstrom: f64,
    /// Fraction of the light through the slit and the extraction.
    pub slit_transmission: f64,
    /// The spectrograph's part of the visit (acquisition on the slit,
    /// exposures, readouts), seconds.
    pub visit_s: f64,
}

/// Where and when a method may observe a target.
#[derive(Debug, Clone)]
pub struct Setting<'a> {
    /// The site.
    pub site: &'a Site,
    /// The target.
    pub target: &'a Target,
    /// First night (local date) of the range.
    pub from: NaiveDate,
    /// Last night (local date) of the range, inclusive.
    pub to: NaiveDate,
    /// Altitude and Sun limits for observing windows.
    pub limits: Limits,
}

/// The exposure in one band within a visit.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct BandExposure {
    /// Photometric band (a name from the band catalogue, e.g. "V").
    pub band: String,
    /// Total exposure in this band, seconds.
    pub exptime_s: f64,
    /// Number of sub-exposures (frames) in this band.
    pub n_exposures: u32,
    /// Expected signal-to-noise in this band.
    pub snr: f64,
}

/// One planned or actual observation of a target.
///
/// A visit may expose in several bands (a colour for a supernova, V and I for
/// a reddening-free index): `exposures` lists them in the order taken, the
/// first being the method's primary band; `exptime_s` and `n_exposures` are
/// their totals and `snr` is the primary band's. `visit_s` includes every
/// overhead (acquisition, readouts, filter changes).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Epoch {
    /// Mid-exposure instant.
    pub time: Instant,
    /// Total exposure, seconds.
    pub exptime_s: f64,
    /// Number of sub-exposures.
    pub n_exposures: u32,
    /// Expected signal-to-noise.
    pub snr: f64,
    /// Airmass at mid-exposure.
    pub airmass: f64,
    /// Time the visit takes with overheads, seconds.
    pub visit_s: f64,
    /// The exposure in each band, primary band first.
    pub exposures: Vec<BandExposure>,
}

impl BandExposure {
    /// The one band of a single-band visit.
    pub fn single(band: &str, exptime_s: f64, n_exposures: u32, snr: f64) -> Vec<BandExposure> {
        vec![BandExposure {
            band: band.to_string(),
            exptime_s,
            n_exposures,
            snr,
        }]
    }
}

/// How a distance goal stands for a target.
///
/// Worded here once: [`Verdict::label`] (the machine label), [`Verdict::text`]
/// (the words every table, view and export shows) and [`Verdict::short`] (a
/// narrow column). In JSON a verdict is an object with its variant under
/// `verdict` and its fields, plus `label` and `text`.
#[derive(Debug, Clone, PartialEq)]
pub enum Verdict {
    /// The goal is reached with the epochs given.
    Reachable,
    /// The method cannot do better than `floor_pct` whatever the time spent.
    LimitedByFloor {
        /// Best achievable σ_d/d, percent.
        floor_pct: f64,
    },
    /// The target is not observable enough in the range.
    NotObservable {
        /// When it would be (text), if known.
        when: Option<String>,
    },
    /// More seasons (a longer baseline or more nights) are needed.
    NeedsMoreSeasons {
        /// How many seasons would do, if known.
        seasons: Option<u32>,
    },
    /// The period and epoch are too old for the phases the visits must hit
    /// (a pulsator's phase uncertainty past `stale_phase`): whatever the
    /// visits give, the distance waits for a refreshed ephemeris (observed
    /// maxima refitted, `rung phase --maxima`).
    StaleEphemeris {
        /// The phase uncertainty at the visits, cycles.
        phase_sigma: f64,
    },
}

impl Verdict {
    /// The machine label: `reachable`, `floor`, `not_observable`,
    /// `more_seasons`, `stale_ephemeris` (the budget's `verdict_label` and CSV `verdict`).
    pub fn label(&self) -> &'static str {
        match self {
            Verdict::Reachable => "reachable",
            Verdict::LimitedByFloor { .. } => "floor",
            Verdict::NotObservable { .. } => "not_observable",
            Verdict::NeedsMoreSeasons { .. } => "more_seasons",
            Verdict::StaleEphemeris { .. } => "stale_ephemeris",
        }
    }

    /// The verdict in words, as every table, view and export shows it:
    /// "reachable", "floor 10.1 %", "not observable (why)", "needs 3 seasons",
    /// "needs more seasons".
    pub fn text(&self) -> String {
        match self {
            Verdict::Reachable => "reachable".into(),
            Verdict::LimitedByFloor { floor_pct } => {
                format!("floor {} %", crate::output::num(*floor_pct, 1))
            }
            Verdict::NotObservable { when: Some(w) } => format!("not observable ({w})"),
            Verdict::NotObservable { when: None } => "not observable".into(),
            Verdict::NeedsMoreSeasons { seasons: Some(n) } => format!("needs {n} seasons"),
            Verdict::NeedsMoreSeasons { seasons: None } => "needs more seasons".into(),
            Verdict::StaleEphemeris { phase_sigma } => format!(
                "needs its ephemeris refreshed (phase ± {} cycle)",
                crate::output::num(*phase_sigma, 2)
            ),
        }
    }

    /// The verdict in at most 7 characters, for a narrow column where the
    /// precision is not a number: "reach", "floor", "unobs", "3 seas",
    /// "seas" (the same words as [`Verdict::text`], cut).
    pub fn short(&self) -> String {
        match self {
            Verdict::Reachable => "reach".into(),
            Verdict::LimitedByFloor { .. } => "floor".into(),
            Verdict::NotObservable { .. } => "unobs".into(),
            Verdict::NeedsMoreSeasons { seasons: Some(n) } => format!("{n} seas"),
            Verdict::NeedsMoreSeasons { seasons: None } => "seas".into(),
            Verdict::StaleEphemeris { .. } => "ephem".into(),
        }
    }
}

impl Serialize for Verdict {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> std::result::Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = ser.serialize_map(None)?;
        let variant = match self {
            Verdict::Reachable => "reachable",
            Verdict::LimitedByFloor { .. } => "limited_by_floor",
            Verdict::NotObservable { .. } => "not_observable",
            Verdict::NeedsMoreSeasons { .. } => "needs_more_seasons",
            Verdict::StaleEphemeris { .. } => "stale_ephemeris",
        };
        m.serialize_entry("verdict", variant)?;
        match self {
            Verdict::Reachable => {}
            Verdict::LimitedByFloor { floor_pct } => m.serialize_entry("floor_pct", floor_pct)?,
            Verdict::NotObservable { when } => m.serialize_entry("when", when)?,
            Verdict::NeedsMoreSeasons { seasons } => m.serialize_entry("seasons", seasons)?,
            Verdict::StaleEphemeris { phase_sigma } => {
                m.serialize_entry("phase_sigma_cycles", phase_sigma)?
            }
        }
        m.serialize_entry("label", self.label())?;
        m.serialize_entry("text", &self.text())?;
        m.end()
    }
}

/// σ_d/d per magnitude of σ_μ: d ∝ 10^(μ/5), so σ_d/d = (ln 10 / 5) σ_μ.
pub const DIST_FRAC_PER_MAG: f64 = std::f64::consts::LN_10 / 5.0;

/// One named term of a distance's error budget.
///
/// Terms add in quadrature. A *shared* term is common to every distance
/// calibrated the same way (the zero point of a period–luminosity relation, the
/// peak luminosity of standardized supernovae, the distance scale): it does not
/// average down over many targets and the distance ladder carries it apart
/// from each target's own terms (docs/science.md, Distances).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ErrorTerm {
    /// What the term is, in words ("parallax", "mean magnitude", "relation scatter", ...).
    pub name: String,
    /// The term's contribution to σ_μ, magnitudes.
    pub sigma_mag: f64,
    /// The same contribution as σ_d/d, percent: 100 · (ln 10 / 5) · sigma_mag.
    pub distance_pct: f64,
    /// Shared by every distance calibrated the same way (not averaged down).
    pub shared: bool,
}

impl ErrorTerm {
    /// A term from its σ_μ in magnitudes.
    pub fn from_mag(name: impl Into<String>, sigma_mag: f64, shared: bool) -> Self {
        ErrorTerm {
            name: name.into(),
            sigma_mag,
            distance_pct: 100.0 * DIST_FRAC_PER_MAG * sigma_mag,
            shared,
        }
    }

    /// A term from its σ_d/d in percent.
    pub fn from_pct(name: impl Into<String>, distance_pct: f64, shared: bool) -> Self {
        ErrorTerm {
            name: name.into(),
            sigma_mag: distance_pct / (100.0 * DIST_FRAC_PER_MAG),
            distance_pct,
            shared,
        }
    }
}

/// The quadrature sum of error terms as σ_d/d, percent.
pub fn total_pct(terms: &[ErrorTerm]) -> f64 {
    terms
        .iter()
        .map(|t| t.distance_pct.powi(2))
        .sum::<f64>()
        .sqrt()
}

/// What a set of epochs buys.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Prediction {
    /// The method.
    pub kind: Kind,
    /// The epochs the prediction is for.
    pub epochs: Vec<Epoch>,
    /// Predicted distance precision σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// Telescope hours with overheads.
    pub hours_needed: f64,
    /// Verdict against the goal (Reachable when no goal was given and the precision is finite).
    pub verdict: Verdict,
    /// Warnings and explanations for the observer.
    pub notes: Vec<String>,
    /// The error budget of `distance_precision_pct` by term (empty when the
    /// epochs give no finite precision); the terms add in quadrature to it.
    pub error_terms: Vec<ErrorTerm>,
}

/// The spacing the scheduler keeps between two visits of one target unless
/// the method says otherwise ([`Method::min_spacing_s`]): 12 hours, one visit
/// a night (common practice: a second visit in the same night repeats the
/// same epoch).
pub const DEFAULT_SPACING_S: f64 = 12.0 * 3600.0;

/// The face every distance method shows.
pub trait Method: Send + Sync {
    /// Which targets this method serves.
    fn kind(&self) -> Kind;
    /// Propose epochs over the range (the method's own cadence rule).
    fn propose(&self, s: &Setting, em: &dyn ExposureModel) -> Result<Vec<Epoch>>;
    /// The precision a set of epochs buys.
    fn predict(&self, s: &Setting, em: &dyn ExposureModel, epochs: &[Epoch]) -> Result<Prediction>;
    /// [`Method::predict`] of `base` followed by each of `extra` in turn,
    /// one answer per extra epoch, in order (the scheduler's fill weighs one
    /// visit more on each night). A method may keep what the extra epoch
    /// does not change, as long as every answer is the one `predict` gives.
    /// Default: `predict` for each.
    fn predict_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra: &[Epoch],
    ) -> Vec<Result<Prediction>> {
        predict_each_by_one(self, s, em, base, extra)
    }
    /// [`Method::predict`] of `base`, then, when it is not refused,
    /// [`Method::predict_each_extra`] of `base` with the epochs
    /// `extra_for` gives for that prediction (none asked when it gives
    /// none, or when the base is refused). The scheduler's fill weighs
    /// each night's visit against the base's precision, so a method may
    /// keep the base's work for both, as long as every answer is
    /// `predict`'s. Default: [`predict_then_each_by_one`].
    fn predict_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        predict_then_each_by_one(self, s, em, base, extra_for)
    }
    /// The scheduler's fill: [`Method::predict`] of `base`, bit for bit,
    /// then, as [`Method::predict_then_each_extra`], the precision of `base`
    /// with each of the epochs `extra_for` gives, which only ranks those
    /// candidate visits (against the base and one another). A method may
    /// work an extra epoch out at its night's interpolated context
    /// ([`crate::astro::night::Night::context`]) instead of the exact one
    /// (a full SOFA chain per candidate): its answers then differ from
    /// `predict`'s in the last digits, and nothing printed comes from them.
    /// Default: [`Method::predict_then_each_extra`].
    fn rank_then_each_extra(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        base: &[Epoch],
        extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    ) -> (Result<Prediction>, Vec<Result<Prediction>>) {
        self.predict_then_each_extra(s, em, base, extra_for)
    }
    /// The epochs and hours that reach `goal_pct`, or why they cannot.
    fn goal(&self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction>;
    /// A search that answers [`Method::goal`] for several goals of one
    /// target asked one after another (the budget's inverse curve): a method
    /// may keep between asks what does not depend on the goal, as long as
    /// every answer is the one [`Method::goal`] gives. Default: each ask is
    /// [`Method::goal`].
    fn goal_search(&self) -> Box<dyn GoalSearch + '_> {
        Box::new(EachGoal(self))
    }
    /// The least time between two visits of one target that the method
    /// counts as two epochs, seconds. The scheduler keeps visits of a target
    /// at least this far apart, or as far apart as the method's own epochs
    /// when it asks for them closer. Default: [`DEFAULT_SPACING_S`], one
    /// visit a night.
    fn min_spacing_s(&self) -> f64 {
        DEFAULT_SPACING_S
    }
    /// Which of the `wanted` epochs the `done` ones already give, by the
    /// method's own measure of a repeated epoch. The scheduler does not plan
    /// those again when it re-plans, and the Next queue asks whether an epoch
    /// tonight can be had tomorrow night. One entry per wanted epoch:
    /// `Some(why)` when a done epoch gives it, `None` when it is still
    /// wanted; a done epoch gives at most one. Default: [`covered_nearest`]
    /// (each done epoch gives the wanted epoch nearest it in time: a visit
    /// stands for the epoch it was planned as).
    fn covered(
        &self,
        s: &Setting,
        done: &[Epoch],
        wanted: &[Epoch],
    ) -> Result<Vec<Option<String>>> {
        let _ = s;
        Ok(covered_nearest(done, wanted))
    }
    /// The distance goal (percent) the method plans for when neither the
    /// target nor its programme gives one.
    fn default_goal_pct(&self) -> Option<f64> {
        None
    }
    /// The method's configuration as JSON: shown by `--json`, and two methods
    /// with equal configurations give equal answers (the UI's caches compare it).
    fn config_json(&self) -> serde_json::Value {
        serde_json::Value::Null
    }
    /// The method itself, for a command or view that shows its own report
    /// (see [`MethodSet::get`]).
    fn as_any(&self) -> &dyn std::any::Any;
    /// What one more visit like those of `planned` buys: the prediction with
    /// it added (its hours and error terms), for the distance ladder's "what
    /// the next hour buys" (`ladder::chain`). The default tries a repeat of
    /// each of up to [`ONE_MORE_TRIES`] planned epochs spread through the
    /// plan and keeps the one whose fall in σ_d/d per added hour is largest;
    /// a method may override it with a better-placed visit. `None` when
    /// nothing is planned or no repeat helps.
    fn one_more(
        &self,
        s: &Setting,
        em: &dyn ExposureModel,
        planned: &Prediction,
    ) -> Result<Option<Prediction>> {
        one_more_by_repeat(self, s, em, planned)
    }
}

/// [`Method::predict`] of `base` followed by each of `extra`, one call each:
/// the default of [`Method::predict_each_extra`], and what a method's own
/// answer must equal.
pub fn predict_each_by_one<M: Method + ?Sized>(
    m: &M,
    s: &Setting,
    em: &dyn ExposureModel,
    base: &[Epoch],
    extra: &[Epoch],
) -> Vec<Result<Prediction>> {
    extra
        .iter()
        .map(|e| {
            let mut with = base.to_vec();
            with.push(e.clone());
            m.predict(s, em, &with)
        })
        .collect()
}

/// [`Method::predict`] of `base`, then [`Method::predict_each_extra`] of
/// the epochs `extra_for` gives for it: the default of
/// [`Method::predict_then_each_extra`].
pub fn predict_then_each_by_one<M: Method + ?Sized>(
    m: &M,
    s: &Setting,
    em: &dyn ExposureModel,
    base: &[Epoch],
    extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
) -> (Result<Prediction>, Vec<Result<Prediction>>) {
    then_each(m.predict(s, em, base), extra_for, |extra| {
        if extra.is_empty() {
            Vec::new()
        } else {
            m.predict_each_extra(s, em, base, extra)
        }
    })
}

/// What [`Method::predict_then_each_extra`] answers from the base's
/// prediction: when it is not refused, `each` of the epochs `extra_for`
/// gives for it; when it is, no extra answer.
pub fn then_each(
    base: Result<Prediction>,
    extra_for: &mut dyn FnMut(&Prediction) -> Vec<Epoch>,
    each: impl FnOnce(&[Epoch]) -> Vec<Result<Prediction>>,
) -> (Result<Prediction>, Vec<Result<Prediction>>) {
    match base {
        Ok(p) => {
            let extra = extra_for(&p);
            let answers = each(&extra);
            (Ok(p), answers)
        }
        Err(e) => (Err(e), Vec::new()),
    }
}

/// `f` of `base` with each of `extra` in turn appended (one epoch list
/// reused), one answer per extra epoch, in order; `f` is given the extra
/// epoch and the whole list.
pub fn with_each_extra(
    base: &[Epoch],
    extra: &[Epoch],
    mut f: impl FnMut(&Epoch, &[Epoch]) -> Result<Prediction>,
) -> Vec<Result<Prediction>> {
    let mut all = Vec::with_capacity(base.len() + 1);
    all.extend_from_slice(base);
    extra
        .iter()
        .map(|e| {
            all.truncate(base.len());
            all.push(e.clone());
            f(e, &all)
        })
        .collect()
}

/// Goals of one target asked one after another ([`Method::goal_search`]).
pub trait GoalSearch {
    /// [`Method::goal`] of the method the search came from.
    fn goal(&mut self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction>;
}

/// The default [`GoalSearch`]: every ask is [`Method::goal`].
struct EachGoal<'a, M: ?Sized>(&'a M);

impl<M: Method + ?Sized> GoalSearch for EachGoal<'_, M> {
    fn goal(&mut self, s: &Setting, em: &dyn ExposureModel, goal_pct: f64) -> Result<Prediction> {
        self.0.goal(s, em, goal_pct)
    }
}

/// Planned epochs the default [`Method::one_more`] tries to repeat.
pub const ONE_MORE_TRIES: usize = 6;

/// The default [`Method::one_more`]: repeat, in turn, up to
/// [`ONE_MORE_TRIES`] planned epochs spread through the plan (first, last
/// and between) and keep the repeat with the largest fall in σ_d/d per added
/// hour.
pub fn one_more_by_repeat<M: Method + ?Sized>(
    m: &M,
    s: &Setting,
    em: &dyn ExposureModel,
    planned: &Prediction,
) -> Result<Option<Prediction>> {
    let n = planned.epochs.len();
    if n == 0 || !planned.distance_precision_pct.is_finite() {
        return Ok(None);
    }
    let tries = ONE_MORE_TRIES.min(n);
    let mut picks: Vec<usize> = (0..tries)
        .map(|k| {
            if tries == 1 {
                0
            } else {
                k * (n - 1) / (tries - 1)
            }
        })
        .collect();
    picks.dedup();
    // The same epochs through `predict`, so the comparison is like for like.
    let base = m.predict(s, em, &planned.epochs)?;
    if !base.distance_precision_pct.is_finite() {
        return Ok(None);
    }
    let mut best: Option<(f64, Prediction)> = None;
    for i in picks {
        let mut epochs = planned.epochs.clone();
        epochs.push(planned.epochs[i].clone());
        let p = m.predict(s, em, &epochs)?;
        let dh = p.hours_needed - base.hours_needed;
        let gain = base.distance_precision_pct - p.distance_precision_pct;
        if !(dh > 0.0 && gain > 0.0 && p.distance_precision_pct.is_finite()) {
            continue;
        }
        let rate = gain / dh;
        if best.as_ref().is_none_or(|(r, _)| rate > *r) {
            best = Some((rate, p));
        }
    }
    Ok(best.map(|(_, p)| p))
}

/// The default measure of [`Method::covered`]: each done epoch, in order,
/// gives the wanted epoch nearest it in time not yet given (the first of
/// equals).
pub fn covered_nearest(done: &[Epoch], wanted: &[Epoch]) -> Vec<Option<String>> {
    let mut out: Vec<Option<String>> = vec![None; wanted.len()];
    for d in done {
        let near = (0..wanted.len())
            .filter(|k| out[*k].is_none())
            .min_by(|a, b| {
                let da = wanted[*a].time.seconds_since(&d.time).abs();
                let db = wanted[*b].time.seconds_since(&d.time).abs();
                da.total_cmp(&db)
            });
        if let Some(k) = near {
            out[k] = Some(format!("given by the visit done at {}", d.time.iso()));
        }
    }
    out
}

/// Which of a visit's bands (`bands`, primary first) a method's prediction
/// takes the signal-to-noise of from the visit itself ([`Epoch::snr`],
/// [`BandExposure::snr`]), so that a value measured on a done visit in
/// such a band changes the outcome: the primary band of a parallax star
/// (its centroid error) and of a pulsator (its phase point); every band of
/// a supernova but its classification spectrum (the light-curve points);
/// none for a field (each star's is worked out from the exposure, star by
/// star) or a plain target (no distance). Else the reason none is taken.
pub fn bands_weighed(kind: Kind, bands: &[String]) -> std::result::Result<Vec<String>, String> {
    match kind {
        Kind::Parallax | Kind::Pulsator => Ok(bands.iter().take(1).cloned().collect()),
        Kind::Transient => Ok(bands
            .iter()
            .filter(|b| b.as_str() != transient::SPECTRUM_BAND)
            .cloned()
            .collect()),
        Kind::Field => Err(
            "a field's stars each have their own signal-to-noise, which rung works out from the exposure star by star"
                .into(),
        ),
        Kind::Plain => Err("a plain target has no distance to take it".into()),
    }
}

/// The distance goal of a target (percent): its own `goal_pct`, else the
/// programme's `programme_goal_pct`, else its method's default, else none.
/// The one rule: the budget, the scheduler and every view use it.
pub fn goal_for(t: &Target, programme_goal_pct: Option<f64>, m: &dyn Method) -> Option<f64> {
    t.goal_pct
        .or(programme_goal_pct)
        .or_else(|| m.default_goal_pct())
}

/// The target as its method sees it: with `goal_pct` set to the goal it is
/// planned for ([`goal_for`]), so a method's verdict (which compares with
/// `Setting::target.goal_pct`) judges the same goal whether the goal came from
/// the target, its programme or the method's default.
pub fn with_goal(t: &Target, goal_pct: Option<f64>) -> std::borrow::Cow<'_, Target> {
    if t.goal_pct == goal_pct {
        std::borrow::Cow::Borrowed(t)
    } else {
        let mut t = t.clone();
        t.goal_pct = goal_pct;
        std::borrow::Cow::Owned(t)
    }
}

/// The distance methods of a programme, each with its configuration.
#[derive(Clone)]
pub struct MethodSet(Vec<Arc<dyn Method>>);

impl MethodSet {
    /// A set of methods (one per kind; the first of a kind serves it).
    pub fn new(list: Vec<Arc<dyn Method>>) -> Self {
        MethodSet(list)
    }

    /// The method serving a kind of target, if any.
    pub fn for_kind(&self, kind: Kind) -> Option<&dyn Method> {
        self.0.iter().find(|m| m.kind() == kind).map(|m| m.as_ref())
    }

    /// Every method, in list order.
    pub fn iter(&self) -> impl Iterator<Item = &dyn Method> {
        self.0.iter().map(|m| m.as_ref())
    }

    /// The kinds served, in list order.
    pub fn kinds(&self) -> Vec<Kind> {
        self.iter().map(|m| m.kind()).collect()
    }

    /// The shared handles of the methods, in list order.
    pub fn arcs(&self) -> Vec<Arc<dyn Method>> {
        self.0.clone()
    }

    /// The method of a given type (for its own report: the parallax plan, the
    /// phase report, the chase).
    pub fn get<M: Method + 'static>(&self) -> Option<&M> {
        self.0.iter().find_map(|m| m.as_any().downcast_ref::<M>())
    }
}

impl PartialEq for MethodSet {
    fn eq(&self, o: &Self) -> bool {
        self.0.len() == o.0.len()
            && self
                .iter()
                .zip(o.iter())
                .all(|(a, b)| a.kind() == b.kind() && a.config_json() == b.config_json())
    }
}

impl std::fmt::Debug for MethodSet {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_list()
            .entries(self.iter().map(|m| m.kind().as_str()))
            .finish()
    }
}

/// Every distance method rung knows, each with its configuration: the
/// built-in `config/<method>.toml`, the user's file of the same name merged
/// over it, then a file named on the command line (`extra`, by config file
/// name, e.g. `parallax.toml` → the file given to `rung parallax --config`).
///
/// This is the one method list: a new method is one line here.
pub fn methods(extra: &BTreeMap<String, PathBuf>) -> Result<MethodSet> {
    let file = |name: &str| extra.get(name).map(|p| p.as_path());
    Ok(MethodSet::new(vec![
        Arc::new(parallax::ParallaxMethod::load(file("parallax.toml"))?),
        Arc::new(pulsator::PulsatorMethod::load(file("pulsator.toml"))?),
        Arc::new(transient::TransientMethod::load(file("transient.toml"))?),
    ]))
}
