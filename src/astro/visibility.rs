//! The visibility table: what a target does in a night, computed once in
//! closed form and shared by every job that asks (`rung night`, the UI's
//! Roster and Tonight, the distance methods, the budget and the scheduler).
//!
//! Per night, one [`SkyFrame`] (built with each night and kept in it):
//! SOFA astrometry contexts at the start, middle and end of the night, the
//! Earth rotation angle as a linear function of time, and SOFA's refraction
//! tabulated once per site ([`Refraction`]).
//!
//! Per target and night, a [`Track`]: the target's CIRS place (SOFA `atciq`)
//! at those three instants, interpolated quadratically (it moves by well
//! under 1″ in a night). The hour angle then runs at the Earth's rotation
//! rate, and the geometric altitude follows the closed form of spherical
//! astronomy, sin h = sin φ sin δ + cos φ cos δ cos H (Meeus, *Astronomical
//! Algorithms*, 2nd ed., eq. 13.6), so every rise, set, transit and window
//! edge has a closed-form first guess. Each guess is then refined on the
//! exact observed place, SOFA `atioq` with the Earth rotation angle of the
//! instant (the same numbers as `Night::context` gives, to 0.01″), by a
//! Newton step from the closed form's slope and secant steps: one to three
//! evaluations reach the millisecond, where bisection from the night's
//! 10-minute grid took ten evaluations (each with a fresh context) to reach
//! one second.
//!
//! The rules are those of the grid method the table replaced (DEVELOPERS.md,
//! Events): a window is the overlap of the intervals above the altitude limit
//! (and the horizon mask) with the dark intervals, each found on its own, so
//! short overlaps are found; the highest altitude in the dark is taken over
//! the dark intervals, their ends included (a target climbing or sinking
//! through all the dark time peaks at one end).

use crate::astro::airmass::kasten_young;
use crate::astro::events::illinois;
use crate::astro::frames::{CatalogPlace, NightFrame, Observed};
use crate::astro::site::Site;
use crate::astro::time::{Instant, TaiBase};
use crate::astro::window::{Event, Limits, STAR_RISE_SET_DEG, TargetNight, intersect_intervals};
use sofars::astro::{IauAstrom, atciq, atioq};
use std::f64::consts::{FRAC_PI_2, PI, TAU};
use std::sync::Arc;

/// Earth rotation rate, radians per UT1 second: 2π × 1.00273781191135448 per
/// day, the rate of the IAU 2000 Earth rotation angle (IERS Conventions 2010,
/// eq. 5.15; SOFA `era00`).
pub const ERA_RATE_RAD_S: f64 = TAU * 1.002_737_811_911_354_5 / 86_400.0;

/// Sampling step of the horizon mask where it can bite, seconds; each sign
/// change is then refined to [`REFINE_TOL_S`]. Mask features narrower than
/// this in time (a few arcminutes of azimuth near the meridian) can be missed.
pub const MASK_STEP_S: f64 = 240.0;

/// Tolerance of every refined event, seconds.
pub const REFINE_TOL_S: f64 = 0.001;

/// How far (radians, 2°) the closed-form geometric altitude must stand from
/// a threshold, or from another instant's, for its side to be taken without
/// an exact evaluation: the closed form is good to a few arcseconds, and
/// refraction (SOFA `atioq`, never negative) stays under 1° even at and
/// below the horizon, so the exact observed or geometric altitude is on the
/// same side.
const SURE_RAD: f64 = 2.0 * std::f64::consts::PI / 180.0;

/// How far a refined crossing of an altitude threshold can stand from its
/// closed-form guess, seconds: [`polish`] keeps every step within this of
/// the guess, whatever the function does ([`Track::windows_bound`] leans
/// on it).
pub const CROSSING_REACH_S: f64 = 600.0;

/// How far a refined upper transit can stand from its closed-form guess,
/// seconds (the same way).
pub const TRANSIT_REACH_S: f64 = 120.0;

/// Seconds added to each side of a bound built from the reaches above:
/// far beyond the rounding of offsets through instants and back.
const BOUND_SLACK_S: f64 = 5.0;

/// How far (radians at the equator; divided by the cosine of the
/// declination elsewhere) the closed-form hour angle may stand from the
/// exact one for its side of a limit to be taken without an exact
/// evaluation ([`Track::ha_sure_rad`]): the closed form leaves out the CIRS
/// place's motion through the night (under 1″ of right ascension), diurnal
/// aberration (0.3″) and polar motion (under 1″), each divided by cos δ on
/// the hour-angle axis, so 1e-4 rad (21″) is ten times their sum (unit test
/// `closed_form_hour_angle_is_within_its_margin`).
const HA_SURE_RAD: f64 = 1e-4;

/// Geometric altitude range of the refraction table, degrees, and its step.
const REFR_G0_DEG: f64 = -3.0;
const REFR_STEP_DEG: f64 = 0.05;
const REFR_N: usize = 1862; // (90 − (−3)) / 0.05 + 2

/// Refraction of SOFA `atioq` as a function of geometric altitude, tabulated
/// once for a site's `refco` constants (SOFA's A tan z + B tan³ z model with
/// its Newton correction and its low-altitude clamp). Linear interpolation on
/// 0.05° steps errs by under 0.5″ down to the horizon, far less above it; it
/// serves closed-form first guesses and drawings, never a reported number
/// without an exact evaluation after it.
#[derive(Debug, Clone)]
pub struct Refraction {
    r_rad: Vec<f64>,
}

impl Refraction {
    /// Tabulate from an astrometry context whose `refa`, `refb` (and latitude)
    /// are the site's.
    ///
    /// The table depends on the site's terms only: the local Earth rotation
    /// angle is set to zero (a direction's hour angle is then minus its
    /// CIRS right ascension, exactly), so the table [`Refraction::shared`]
    /// keeps for a site is the same whichever night's context built it.
    pub fn new(astrom: &IauAstrom) -> Self {
        let mut astrom = *astrom;
        astrom.eral = 0.0;
        let astrom = &astrom;
        let mut geo = *astrom;
        geo.refa = 0.0;
        geo.refb = 0.0;
        let r_rad = (0..REFR_N)
            .map(|i| {
                let g = (REFR_G0_DEG + REFR_STEP_DEG * i as f64)
                    .min(90.0)
                    .to_radians();
                // A direction at that altitude due east, as CIRS RA/Dec.
                let [ha, dec] = sofars::coords::ae2hd(PI / 2.0, g, astrom.phi);
                let ri = astrom.eral - ha;
                let (_, zob, ..) = atioq(ri, dec, astrom);
                let (_, zgeo, ..) = atioq(ri, dec, &geo);
                zgeo - zob
            })
            .collect();
        Refraction { r_rad }
    }

    /// The table for a site's refraction constants, built once per process
    /// and shared (a handful of sites are ever in use). The key holds every
    /// field of `astrom` the table depends on, so the table is the same bits
    /// whichever thread or night asks first (the events refined from it,
    /// and every number after them, do not depend on the order of work).
    pub fn shared(astrom: &IauAstrom) -> Arc<Refraction> {
        use std::sync::{Mutex, OnceLock};
        type Memo = Mutex<Vec<([u64; 8], Arc<Refraction>)>>;
        static MEMO: OnceLock<Memo> = OnceLock::new();
        let key = [
            astrom.refa.to_bits(),
            astrom.refb.to_bits(),
            astrom.phi.to_bits(),
            astrom.sphi.to_bits(),
            astrom.cphi.to_bits(),
            astrom.diurab.to_bits(),
            astrom.xpl.to_bits(),
            astrom.ypl.to_bits(),
        ];
        let memo = MEMO.get_or_init(|| Mutex::new(Vec::new()));
        if let Ok(m) = memo.lock()
            && let Some((_, r)) = m.iter().find(|(k, _)| *k == key)
        {
            return r.clone();
        }
        let r = Arc::new(Refraction::new(astrom));
        if let Ok(mut m) = memo.lock() {
            if m.len() >= 64 {
                m.remove(0);
            }
            m.push((key, r.clone()));
        }
        r
    }

    /// Refraction (observed − geometric altitude), radians, at geometric altitude `g_rad`.
    pub fn at(&self, g_rad: f64) -> f64 {
        let x = (g_rad.to_degrees() - REFR_G0_DEG) / REFR_STEP_DEG;
        if x <= 0.0 {
            return self.r_rad[0];
        }
        let i = x as usize;
        if i + 1 >= self.r_rad.len() {
            return *self.r_rad.last().unwrap_or(&0.0);
        }
        let f = x - i as f64;
        self.r_rad[i] * (1.0 - f) + self.r_rad[i + 1] * f
    }

    /// Observed altitude, radians, of a geometric altitude `g_rad`.
    pub fn observed(&self, g_rad: f64) -> f64 {
        g_rad + self.at(g_rad)
    }

    /// Geometric altitude, radians, that refracts onto the observed altitude `obs_rad`.
    pub fn geometric(&self, obs_rad: f64) -> f64 {
        let mut g = obs_rad;
        for _ in 0..8 {
            g = obs_rad - self.at(g);
        }
        g
    }
}

/// What one night offers every target: SOFA astrometry at its start, middle
/// and end, the Earth rotation angle through it, and the site's refraction.
/// Built once per night inside `Night`; all times are seconds (SI) from the
/// night's start.
#[derive(Debug, Clone)]
pub struct SkyFrame {
    t0: TaiBase,
    span_s: f64,
    /// Contexts (refracted) at 0, span/2 and span: what `atciq` needs.
    nodes: [IauAstrom; 3],
    /// The middle context with and without refraction; `atioq` uses only the
    /// site terms and the local Earth rotation angle, set per instant.
    astrom: IauAstrom,
    astrom_geo: IauAstrom,
    eral_mid: f64,
    /// Whether a leap second falls inside the night (UT1 = UTC then jumps by
    /// a second, and the rotation angle is taken from the instant itself).
    leap: bool,
    sin_phi: f64,
    cos_phi: f64,
    refraction: Arc<Refraction>,
    /// The last altitude limit asked of [`Track::above_limit`] (bits) with
    /// its geometric altitude, found once for the night's many targets.
    limit_geom: Arc<std::sync::Mutex<Option<(u64, f64)>>>,
}

impl SkyFrame {
    /// The frame of a night spanning `[start, end]`, from the night's
    /// interpolating frame: geocentric CIRS astrometry (SOFA `apci`) at the
    /// start, middle and end, and the site's terms (SOFA `apio`: Earth
    /// rotation, diurnal aberration, refraction) at the middle. Splitting the
    /// observer's diurnal motion off the CIRS place (where SOFA `apco` puts it)
    /// keeps that place smooth through the night, so three samples carry it;
    /// the two ways agree to far below 0.001″ for stars.
    pub(crate) fn new(site: &Site, start: Instant, end: Instant, frame: &NightFrame) -> Self {
        let span_s = end.seconds_since(&start);
        let mid = start.add_seconds(span_s / 2.0);
        let du1 = {
            let (a0, b0) = start.ut1();
            let (a1, b1) = end.ut1();
            ((a1 - a0) + (b1 - b0)) * 86_400.0
        };
        let phi = site.lat_rad();
        let (astrom, astrom_geo) = frame.site_astrom(mid);
        SkyFrame {
            t0: TaiBase::new(start),
            span_s,
            nodes: [
                frame.geocentric_astrom(start),
                frame.geocentric_astrom(mid),
                frame.geocentric_astrom(end),
            ],
            astrom,
            astrom_geo,
            eral_mid: astrom.eral,
            leap: (du1 - span_s).abs() > 1e-3,
            sin_phi: phi.sin(),
            cos_phi: phi.cos(),
            refraction: Refraction::shared(&astrom),
            limit_geom: Arc::default(),
        }
    }

    /// Seconds from the night's start to `t`.
    pub fn offset(&self, t: Instant) -> f64 {
        self.t0.seconds_to(t)
    }

    /// The instant `s` seconds after the night's start.
    pub fn instant(&self, s: f64) -> Instant {
        self.t0.add_seconds(s)
    }

    /// Length of the night, seconds.
    pub fn span_s(&self) -> f64 {
        self.span_s
    }

    /// The site's refraction table.
    pub fn refraction(&self) -> &Refraction {
        &self.refraction
    }

    /// [`Refraction::geometric`] of the observed altitude `obs_rad`, the
    /// last one asked kept (the same bits as finding it again).
    pub fn limit_geometric(&self, obs_rad: f64) -> f64 {
        let key = obs_rad.to_bits();
        if let Ok(m) = self.limit_geom.lock()
            && let Some((k, g)) = *m
            && k == key
        {
            return g;
        }
        let g = self.refraction.geometric(obs_rad);
        if let Ok(mut m) = self.limit_geom.lock() {
            *m = Some((key, g));
        }
        g
    }

    /// Local Earth rotation angle (ERA + longitude, SOFA `eral`) at offset `s`.
    fn eral(&self, s: f64) -> f64 {
        if self.leap {
            let (u1, u2) = self.instant(s).ut1();
            sofars::erst::era00(u1, u2) + self.astrom.along
        } else {
            self.eral_mid + ERA_RATE_RAD_S * (s - 0.5 * self.span_s)
        }
    }

    /// The target's CIRS place at node `k` (0, 1, 2: the night's start,
    /// middle and end), SOFA `atciq`.
    fn cirs_node(&self, k: usize, place: &CatalogPlace) -> (f64, f64) {
        let mut a = self.nodes[k];
        atciq(
            place.ra_rad,
            place.dec_rad,
            place.pm_ra_rad_yr,
            place.pm_dec_rad_yr,
            place.parallax_arcsec,
            place.rv_kms,
            &mut a,
        )
    }

    /// The target's [`Track`] through the night.
    pub fn track(&self, place: &CatalogPlace) -> Track<'_> {
        self.sketch(place).track(place)
    }

    /// The target's closed form through the night from its CIRS place at
    /// the night's middle alone (one SOFA `atciq` of the track's three):
    /// enough to tell, before the track is built, nights whose windows
    /// cannot matter ([`Sketch::windows_bound`]).
    pub fn sketch(&self, place: &CatalogPlace) -> Sketch<'_> {
        let (r1, d1) = self.cirs_node(1, place);
        let (sd, cd) = d1.sin_cos();
        Sketch(Track {
            frame: self,
            ri: [r1; 3],
            di: [d1; 3],
            ha_mid: sofars::vm::anpm(self.eral_mid - r1),
            a: self.sin_phi * sd,
            b: self.cos_phi * cd,
        })
    }
}

/// A target's closed form through a night ([`SkyFrame::sketch`]): the
/// [`Track`]'s middle node only, so only its closed-form quantities are
/// offered; [`Sketch::track`] completes it into the track itself (the same
/// bits as [`SkyFrame::track`]).
#[derive(Debug, Clone)]
pub struct Sketch<'a>(Track<'a>);

impl<'a> Sketch<'a> {
    /// The track: the start and end nodes added, the right ascensions
    /// unwrapped around the middle one.
    pub fn track(self, place: &CatalogPlace) -> Track<'a> {
        let mut t = self.0;
        for k in [0, 2] {
            let (r, d) = t.frame.cirs_node(k, place);
            t.ri[k] = t.ri[1] + sofars::vm::anpm(r - t.ri[1]);
            t.di[k] = d;
        }
        t
    }

    /// The night's frame.
    pub fn frame(&self) -> &'a SkyFrame {
        self.0.frame
    }

    /// [`Track::half_width_above`].
    pub fn half_width_above(&self, g_rad: f64) -> Option<f64> {
        self.0.half_width_above(g_rad)
    }

    /// [`Track::transits_linear`].
    pub fn transits_linear(&self, lo: f64, hi: f64) -> Vec<f64> {
        self.0.transits_linear(lo, hi)
    }

    /// [`Track::windows_bound`].
    pub fn windows_bound(
        &self,
        dark_s: &[(f64, f64)],
        min_alt_deg: f64,
    ) -> Option<Vec<(f64, f64)>> {
        self.0.windows_bound(dark_s, min_alt_deg)
    }
}

/// One target through one night: its CIRS place interpolated from three
/// SOFA `atciq` evaluations, the closed-form altitude for first guesses, and
/// exact observed places (SOFA `atioq`) at any instant. Offsets are seconds
/// from the night's start ([`SkyFrame::offset`]).
#[derive(Debug, Clone)]
pub struct Track<'a> {
    frame: &'a SkyFrame,
    ri: [f64; 3],
    di: [f64; 3],
    /// Closed form at the night's middle: hour angle, and sin h = a + b cos H.
    ha_mid: f64,
    a: f64,
    b: f64,
}

/// A closed-form crossing: offset (s) and whether the quantity rises through it.
type Guess = (f64, bool);

impl<'a> Track<'a> {
    /// The night's frame.
    pub fn frame(&self) -> &'a SkyFrame {
        self.frame
    }

    /// CIRS right ascension and declination at offset `s` (quadratic in time).
    fn cirs(&self, s: f64) -> (f64, f64) {
        let u = s / self.frame.span_s;
        let w0 = 2.0 * (u - 0.5) * (u - 1.0);
        let w1 = -4.0 * u * (u - 1.0);
        let w2 = 2.0 * u * (u - 0.5);
        (
            w0 * self.ri[0] + w1 * self.ri[1] + w2 * self.ri[2],
            w0 * self.di[0] + w1 * self.di[1] + w2 * self.di[2],
        )
    }

    fn astrom_at(&self, s: f64, refracted: bool) -> IauAstrom {
        let mut a = if refracted {
            self.frame.astrom
        } else {
            self.frame.astrom_geo
        };
        a.eral = self.frame.eral(s);
        a
    }

    /// The observed place at offset `s`: the same quantities as
    /// `Context::observe` through the night's frame.
    pub fn observe(&self, s: f64) -> Observed {
        let (ri, di) = self.cirs(s);
        let (aob, zob, ..) = atioq(ri, di, &self.astrom_at(s, true));
        let (_, zog, hog, dog, _) = atioq(ri, di, &self.astrom_at(s, false));
        Observed {
            az_rad: aob,
            alt_rad: FRAC_PI_2 - zob,
            alt_geom_rad: FRAC_PI_2 - zog,
            ha_rad: sofars::vm::anpm(hog),
            dec_rad: dog,
        }
    }

    /// The observed place at instant `t`.
    pub fn observe_at(&self, t: Instant) -> Observed {
        self.observe(self.frame.offset(t))
    }

    /// Geometric (unrefracted) altitude at offset `s`, radians.
    pub fn alt_geom_rad(&self, s: f64) -> f64 {
        let (ri, di) = self.cirs(s);
        FRAC_PI_2 - atioq(ri, di, &self.astrom_at(s, false)).1
    }

    /// Observed (refracted) altitude and azimuth at offset `s`, radians.
    pub fn alt_az_rad(&self, s: f64) -> (f64, f64) {
        let (ri, di) = self.cirs(s);
        let (aob, zob, ..) = atioq(ri, di, &self.astrom_at(s, true));
        (FRAC_PI_2 - zob, aob)
    }

    /// Topocentric hour angle at offset `s`, radians in (−π, π].
    pub fn ha_rad(&self, s: f64) -> f64 {
        let (ri, di) = self.cirs(s);
        sofars::vm::anpm(atioq(ri, di, &self.astrom_at(s, false)).2)
    }

    /// Closed-form hour angle at offset `s` (not wrapped), radians.
    pub fn ha_linear(&self, s: f64) -> f64 {
        self.ha_mid + ERA_RATE_RAD_S * (s - 0.5 * self.frame.span_s)
    }

    /// CIRS declination at the night's middle, radians (the closed form's).
    pub fn dec_mid_rad(&self) -> f64 {
        self.di[1]
    }

    /// Closed-form sine of the geometric altitude at offset `s`.
    pub fn sin_alt_linear(&self, s: f64) -> f64 {
        self.a + self.b * self.ha_linear(s).cos()
    }

    /// Closed-form geometric altitude at offset `s`, radians.
    fn alt_linear_rad(&self, s: f64) -> f64 {
        self.sin_alt_linear(s).clamp(-1.0, 1.0).asin()
    }

    /// Whether the geometric altitude at offset `s` is above `g_rad`, when
    /// the closed form stands more than [`SURE_RAD`] from it (far beyond the
    /// closed form's error and any refraction); `None` nearer. With `g_rad`
    /// the geometric altitude of an observed one ([`Refraction::geometric`]),
    /// the observed altitude is on the same side (unit test
    /// `closed_form_sides_agree_with_the_exact_place`).
    pub fn clearly_above(&self, s: f64, g_rad: f64) -> Option<bool> {
        let h = self.alt_linear_rad(s);
        if h > g_rad + SURE_RAD {
            Some(true)
        } else if h < g_rad - SURE_RAD {
            Some(false)
        } else {
            None
        }
    }

    /// Closed-form geometric altitude at the upper transit, radians.
    pub fn transit_alt_geom_rad(&self) -> f64 {
        (self.a + self.b).clamp(-1.0, 1.0).asin()
    }

    /// The hour-angle half-width (radians, 0 to π) around an upper transit
    /// inside which the geometric altitude is above `g_rad`, closed form;
    /// `None` when the target never is.
    pub fn half_width_above(&self, g_rad: f64) -> Option<f64> {
        let c = if self.b.abs() < 1e-12 {
            if self.a >= g_rad.sin() { -2.0 } else { 2.0 }
        } else {
            (g_rad.sin() - self.a) / self.b
        };
        if c >= 1.0 {
            None
        } else {
            Some(c.max(-1.0).acos())
        }
    }

    /// Offsets where the hour angle is 2πk (upper transits) inside `[lo, hi)`,
    /// closed form (within a second of the refined [`Track::transits`]).
    pub fn transits_linear(&self, lo: f64, hi: f64) -> Vec<f64> {
        (-2..=2)
            .map(|k| 0.5 * self.frame.span_s + (TAU * k as f64 - self.ha_mid) / ERA_RATE_RAD_S)
            .filter(|s| *s >= lo && *s < hi)
            .collect()
    }

    /// Upper transits inside `[lo, hi)`, refined on the exact hour angle.
    pub fn transits(&self, lo: f64, hi: f64) -> Vec<f64> {
        self.transits_linear(lo - 60.0, hi + 60.0)
            .into_iter()
            .map(|s0| {
                polish(
                    &|s| self.ha_rad(s),
                    s0,
                    ERA_RATE_RAD_S,
                    s0 - TRANSIT_REACH_S,
                    s0 + TRANSIT_REACH_S,
                )
            })
            .filter(|s| *s >= lo && *s < hi)
            .collect()
    }

    /// Closed-form crossings of the geometric altitude through `g_rad` inside
    /// `[lo, hi]`, in time order.
    fn crossings_linear(&self, g_rad: f64, lo: f64, hi: f64) -> Vec<Guess> {
        if self.b.abs() < 1e-12 {
            return Vec::new();
        }
        let c = (g_rad.sin() - self.a) / self.b;
        if !(-1.0..1.0).contains(&c) {
            return Vec::new();
        }
        let h0 = c.acos();
        let mut out: Vec<Guess> = Vec::new();
        for k in -2..=2 {
            for (h, rising) in [(-h0, true), (h0, false)] {
                let s =
                    0.5 * self.frame.span_s + (TAU * k as f64 + h - self.ha_mid) / ERA_RATE_RAD_S;
                if s >= lo && s <= hi {
                    out.push((s, rising));
                }
            }
        }
        out.sort_by(|x, y| x.0.total_cmp(&y.0));
        out
    }

    /// Where the exact quantity `f` (≥ 0 "above") is above, over `[lo, hi]`,
    /// with the closed form's crossings of the geometric altitude `g_rad` as
    /// first guesses. Near grazing (the closed form's extreme within 30″ of
    /// the threshold) the exact quantity is sampled instead of trusted to the
    /// closed form.
    ///
    /// With `only` (offsets), a crossing whose guess stands further than
    /// [`CROSSING_REACH_S`] (and [`BOUND_SLACK_S`]) from every interval of
    /// `only` keeps its guess unrefined when the guesses stand further than
    /// twice that apart: its refined place would be on the same side of
    /// every end of `only` and the crossings in the same order
    /// ([`Track::windows_bound`]), so the intervals cut to `only` are the
    /// same.
    fn above(
        &self,
        g_rad: f64,
        f: &dyn Fn(f64) -> f64,
        lo: f64,
        hi: f64,
        only: Option<&[(f64, f64)]>,
    ) -> Vec<(f64, f64)> {
        let top = (self.a + self.b).clamp(-1.0, 1.0).asin();
        let bottom = (self.a - self.b).clamp(-1.0, 1.0).asin();
        let graze = 30f64.to_radians() / 3600.0;
        if (top - g_rad).abs() < graze || (bottom - g_rad).abs() < graze {
            return sampled_intervals(f, lo, hi, 300.0);
        }
        let guesses = self.crossings_linear(g_rad, lo, hi);
        let slope = |s: f64| -> f64 {
            // d(sin h)/ds = −b ω sin H; dh/ds = that / cos h.
            let h = self.ha_linear(s);
            -self.b * ERA_RATE_RAD_S * h.sin() / g_rad.cos().max(1e-6)
        };
        let reach = CROSSING_REACH_S + BOUND_SLACK_S;
        let apart = guesses.windows(2).all(|w| w[1].0 - w[0].0 > 2.0 * reach);
        let matters = |s0: f64| match only {
            Some(d) if apart => d.iter().any(|(a, b)| s0 + reach >= *a && s0 - reach <= *b),
            _ => true,
        };
        let mut crossings: Vec<Guess> = guesses
            .iter()
            .map(|(s0, r)| {
                if !matters(*s0) {
                    return (*s0, *r);
                }
                let s = polish(
                    f,
                    *s0,
                    slope(*s0),
                    (s0 - CROSSING_REACH_S).max(lo),
                    (s0 + CROSSING_REACH_S).min(hi),
                );
                (s, *r)
            })
            .collect();
        crossings.sort_by(|x, y| x.0.total_cmp(&y.0));
        let mut out = Vec::new();
        // Above at the start: the closed form says so when it stands far
        // from the threshold ([`SURE_RAD`]), the exact quantity otherwise.
        let start_above = match self.clearly_above(lo, g_rad) {
            Some(up) => up,
            None => f(lo) >= 0.0,
        };
        let mut open = start_above.then_some(lo);
        for (s, rising) in crossings {
            if rising {
                if open.is_none() {
                    open = Some(s);
                }
            } else if let Some(o) = open.take()
                && s > o
            {
                out.push((o, s));
            }
        }
        if let Some(o) = open
            && hi > o
        {
            out.push((o, hi));
        }
        out
    }

    /// Offsets outside which the night's windows above `min_alt_deg` in the
    /// dark intervals `dark_s` (offsets) cannot lie, whatever the exact place
    /// does, from the closed form alone; `None` when it cannot say (a
    /// grazing night, crossings closer than twice [`CROSSING_REACH_S`], the
    /// side at the night's start not clear).
    ///
    /// [`Track::above_limit`] takes the closed form's crossings in time
    /// order and refines each within [`CROSSING_REACH_S`] of itself
    /// ([`polish`]), so with its guesses further apart than twice that the
    /// refined crossings keep their order and the intervals are the closed
    /// form's, each end moved by at most the reach (or dropped); the horizon
    /// mask only cuts inside them. So the closed form's intervals widened by
    /// the reach (and [`BOUND_SLACK_S`]), cut to the dark, hold the windows
    /// ([`Track::windows_night`]).
    pub fn windows_bound(
        &self,
        dark_s: &[(f64, f64)],
        min_alt_deg: f64,
    ) -> Option<Vec<(f64, f64)>> {
        let span = self.frame.span_s;
        let g_rad = self.frame.limit_geometric(min_alt_deg.to_radians());
        // As in `above`: a grazing night is sampled, not bounded here.
        let top = (self.a + self.b).clamp(-1.0, 1.0).asin();
        let bottom = (self.a - self.b).clamp(-1.0, 1.0).asin();
        let graze = 30f64.to_radians() / 3600.0;
        if (top - g_rad).abs() < graze || (bottom - g_rad).abs() < graze {
            return None;
        }
        let reach = CROSSING_REACH_S + BOUND_SLACK_S;
        let guesses = self.crossings_linear(g_rad, 0.0, span);
        if guesses.windows(2).any(|w| w[1].0 - w[0].0 <= 2.0 * reach) {
            return None;
        }
        let mut open = self.clearly_above(0.0, g_rad)?.then_some(0.0);
        let mut above = Vec::new();
        for (s, rising) in guesses {
            if rising {
                if open.is_none() {
                    open = Some((s - reach).max(0.0));
                }
            } else if let Some(o) = open.take() {
                above.push((o, (s + reach).min(span)));
            }
        }
        if let Some(o) = open {
            above.push((o, span));
        }
        let mut out = Vec::new();
        for &(a0, a1) in &above {
            for &(d0, d1) in dark_s {
                let (lo, hi) = (a0.max(d0) - BOUND_SLACK_S, a1.min(d1) + BOUND_SLACK_S);
                if lo < hi {
                    out.push((lo, hi));
                }
            }
        }
        Some(out)
    }

    /// How far the exact hour angle ([`Track::ha_rad`]) can stand from the
    /// closed form's (`anpm` of [`Track::ha_linear`]), radians, with a wide
    /// margin ([`HA_SURE_RAD`] / cos δ); `None` on a night with a leap second
    /// (the rotation angle is then not the closed form's line) or within
    /// about 1.1° of a pole.
    pub fn ha_sure_rad(&self) -> Option<f64> {
        let c = self.di[1].cos().abs();
        (!self.frame.leap && c > 0.02).then(|| HA_SURE_RAD / c)
    }

    /// The windows of [`Track::windows_night`] and the night's first upper
    /// transit when it can lie inside one of them (refined within
    /// [`TRANSIT_REACH_S`] of a closed-form guess, it is found only when a
    /// guess stands that near a window; `None` otherwise): what a caller
    /// that asks which instants of the windows are usable needs, without the
    /// highest altitude in the dark. The crossings of the altitude limit far
    /// from the dark are not refined (they cannot move a window,
    /// [`Track::above`]).
    pub fn windows_and_transit(
        &self,
        site: &Site,
        dark: &[(Instant, Instant)],
        limits: &Limits,
    ) -> (Vec<(Instant, Instant)>, Option<Instant>) {
        let span = self.frame.span_s;
        let dark_s: Vec<(f64, f64)> = dark
            .iter()
            .map(|(a, b)| (self.frame.offset(*a), self.frame.offset(*b)))
            .collect();
        let above: Vec<(Instant, Instant)> = self
            .above_limit_in(site, limits.min_alt_deg, Some(&dark_s))
            .iter()
            .map(|(a, b)| (self.frame.instant(*a), self.frame.instant(*b)))
            .collect();
        let windows = intersect_intervals(&above, dark);
        let reach = TRANSIT_REACH_S + BOUND_SLACK_S;
        let near = self.transits_linear(-60.0, span + 60.0).iter().any(|g| {
            windows.iter().any(|(a, b)| {
                *g + reach >= self.frame.offset(*a) && *g - reach <= self.frame.offset(*b)
            })
        });
        let transit = if near {
            self.first_transit(&self.transits(0.0, span)).t
        } else {
            None
        };
        (windows, transit)
    }

    /// Rise and set (geometric altitude through −0°34′), the first of each
    /// between the local noons, with the reasons when there is none.
    pub fn rise_set(&self) -> (Event, Event) {
        let span = self.frame.span_s;
        let thr = STAR_RISE_SET_DEG.to_radians();
        let f = |s: f64| self.alt_geom_rad(s) - thr;
        let up = self.above(thr, &f, 0.0, span, None);
        let rise = up.iter().map(|w| w.0).find(|s| *s > 0.0);
        let set = up.iter().map(|w| w.1).find(|s| *s < span);
        let circumpolar = up.len() == 1 && up[0] == (0.0, span);
        let never = up.is_empty();
        let reason = |w: &str| {
            if circumpolar {
                format!("circumpolar at this latitude: never {w}s")
            } else if never {
                "never rises at this latitude".to_string()
            } else {
                format!("does not {w} between the local noons")
            }
        };
        let ev = |s: Option<f64>, w: &str| match s {
            Some(s) => Event {
                t: Some(self.frame.instant(s)),
                reason: None,
            },
            None => Event {
                t: None,
                reason: Some(reason(w)),
            },
        };
        (ev(rise, "rise"), ev(set, "set"))
    }

    /// The first upper transit between the local noons.
    pub fn transit(&self) -> Event {
        self.first_transit(&self.transits(0.0, self.frame.span_s))
    }

    /// The event of the first of the night's upper transits `transits`.
    fn first_transit(&self, transits: &[f64]) -> Event {
        match transits.first() {
            Some(s) => Event {
                t: Some(self.frame.instant(*s)),
                reason: None,
            },
            None => Event {
                t: None,
                reason: Some("no upper transit between the local noons".into()),
            },
        }
    }

    /// Intervals (offsets) with the observed altitude above `limits.min_alt_deg`
    /// and above the site's horizon mask.
    pub fn above_limit(&self, site: &Site, min_alt_deg: f64) -> Vec<(f64, f64)> {
        self.above_limit_in(site, min_alt_deg, None)
    }

    /// [`Track::above_limit`], or with `only` (offsets) the same intervals
    /// inside `only` (they may differ outside): where the horizon mask
    /// cannot bite, the crossings far from `only` are not refined
    /// ([`Track::above`]).
    fn above_limit_in(
        &self,
        site: &Site,
        min_alt_deg: f64,
        only: Option<&[(f64, f64)]>,
    ) -> Vec<(f64, f64)> {
        let span = self.frame.span_s;
        let refr = &self.frame.refraction;
        let lim = min_alt_deg.to_radians();
        let g_lim = self.frame.limit_geometric(lim);
        let f = |s: f64| self.alt_az_rad(s).0 - lim;
        let mask_max = site
            .horizon
            .iter()
            .map(|h| h.alt_deg)
            .fold(f64::NEG_INFINITY, f64::max);
        let only = only.filter(|_| mask_max <= min_alt_deg);
        let base = self.above(g_lim, &f, 0.0, span, only);
        if base.is_empty() || mask_max <= min_alt_deg {
            return base;
        }
        // Where the target stands above the mask's highest point the mask
        // cannot bite (closed form, with a margin for the approximation);
        // sample and refine the rest.
        let margin = |s: f64| -> f64 {
            let (alt, az) = self.alt_az_rad(s);
            alt.to_degrees() - site.horizon_alt_deg(az.to_degrees()).max(min_alt_deg)
        };
        let g_mask = refr.geometric((mask_max + 0.01).to_radians());
        let safe = self.linear_above(g_mask, 0.0, span);
        let mut out = Vec::new();
        for &(lo, hi) in &base {
            let mut x = lo;
            for &(sa, sb) in &safe {
                let (sa, sb) = (sa.max(lo), sb.min(hi));
                if sb <= sa || sb <= x {
                    continue;
                }
                if sa > x {
                    sampled_into(&margin, x, sa, MASK_STEP_S, REFINE_TOL_S, &mut out);
                }
                push_merged(&mut out, (sa.max(x), sb));
                x = sb;
            }
            if hi > x {
                sampled_into(&margin, x, hi, MASK_STEP_S, REFINE_TOL_S, &mut out);
            }
        }
        out
    }

    /// Closed-form intervals above the geometric altitude `g_rad` (no refinement).
    fn linear_above(&self, g_rad: f64, lo: f64, hi: f64) -> Vec<(f64, f64)> {
        let Some(h0) = self.half_width_above(g_rad) else {
            return Vec::new();
        };
        if h0 >= PI {
            return vec![(lo, hi)];
        }
        let mut out = Vec::new();
        for s in self.transits_linear(lo - 86_400.0, hi + 86_400.0) {
            let w = h0 / ERA_RATE_RAD_S;
            let (a, b) = ((s - w).max(lo), (s + w).min(hi));
            if b > a {
                out.push((a, b));
            }
        }
        out
    }

    /// Highest observed altitude inside the intervals `dark` (offsets), and
    /// its offset: at a dark interval's end or at an upper transit inside it.
    pub fn highest_in(&self, dark: &[(f64, f64)]) -> Option<(f64, f64)> {
        let span = self.frame.span_s;
        self.highest_among(dark, &self.transits(0.0, span))
    }

    /// [`Track::highest_in`] with the night's upper transits already found
    /// (`transits(0, span)`: those inside each dark interval are the ones
    /// `transits` finds there, each polished from the same closed-form guess).
    ///
    /// A candidate whose closed-form altitude is [`SURE_RAD`] below the
    /// highest candidate's is lower on the exact place too, so it is not
    /// evaluated: the highest (the first of equals) is the same one.
    fn highest_among(&self, dark: &[(f64, f64)], transits: &[f64]) -> Option<(f64, f64)> {
        let candidates = || {
            dark.iter().flat_map(|&(d0, d1)| {
                let inside = transits
                    .iter()
                    .copied()
                    .filter(move |s| *s >= d0 && *s < d1);
                std::iter::once(d0).chain(inside).chain(std::iter::once(d1))
            })
        };
        let top = candidates()
            .map(|s| self.alt_linear_rad(s))
            .fold(f64::NEG_INFINITY, f64::max);
        let mut best: Option<(f64, f64)> = None;
        for s in candidates() {
            if self.alt_linear_rad(s) < top - SURE_RAD {
                continue;
            }
            let alt = self.alt_az_rad(s).0;
            if best.is_none_or(|b| alt > b.0) {
                best = Some((alt, s));
            }
        }
        best
    }

    /// Rise, transit, set, windows and the highest altitude in the dark, as
    /// `Night::target` reports them: at `site`, with `dark` the intervals of
    /// the night when the Sun is below `limits.sun_alt_deg` (in time order).
    pub fn target_night(
        &self,
        site: &Site,
        dark: &[(Instant, Instant)],
        limits: &Limits,
    ) -> TargetNight {
        let (rise, set) = self.rise_set();
        let mut tn = self.windows_night(site, dark, limits);
        tn.rise = rise;
        tn.set = set;
        tn
    }

    /// [`Track::target_night`] without rise and set (their events carry the
    /// reason "not computed"): what the methods and the budget need.
    pub fn windows_night(
        &self,
        site: &Site,
        dark: &[(Instant, Instant)],
        limits: &Limits,
    ) -> TargetNight {
        let transits = self.transits(0.0, self.frame.span_s);
        let transit = self.first_transit(&transits);
        let above: Vec<(Instant, Instant)> = self
            .above_limit(site, limits.min_alt_deg)
            .iter()
            .map(|(a, b)| (self.frame.instant(*a), self.frame.instant(*b)))
            .collect();
        let windows = intersect_intervals(&above, dark);
        let dark_s: Vec<(f64, f64)> = dark
            .iter()
            .map(|(a, b)| (self.frame.offset(*a), self.frame.offset(*b)))
            .collect();
        let best = self.highest_among(&dark_s, &transits);
        let observable_s: f64 = windows.iter().map(|(a, b)| b.seconds_since(a)).sum::<f64>() + 0.0;
        let best_at = best.map(|(alt, s)| {
            // A dark end keeps its own instant; the night's transit (found
            // again inside the dark interval, to within a millisecond) is
            // the transit instant every other caller uses. With the instant,
            // its offset.
            let (t, off) = dark
                .iter()
                .zip(&dark_s)
                .flat_map(|(d, o)| [(d.0, o.0), (d.1, o.1)])
                .find(|(_, o)| (o - s).abs() < 1e-9)
                .or_else(|| {
                    transit
                        .t
                        .map(|t| (t, self.frame.offset(t)))
                        .filter(|(_, o)| (o - s).abs() < 1e-3)
                })
                .unwrap_or_else(|| {
                    let t = self.frame.instant(s);
                    (t, self.frame.offset(t))
                });
            // The altitude at that instant, as `observe_at` gives it there
            // (found already when its offset is the best one's own).
            let alt = if off.to_bits() == s.to_bits() {
                alt
            } else {
                self.alt_az_rad(off).0
            };
            (t, alt)
        });
        let max_altitude_time = best_at.map(|(t, _)| t);
        let max_alt_deg = best_at.map(|(_, alt)| alt.to_degrees());
        let not_computed = || Event {
            t: None,
            reason: Some("not computed".into()),
        };
        TargetNight {
            rise: not_computed(),
            transit,
            set: not_computed(),
            windows,
            observable_hours: observable_s / 3600.0,
            max_altitude_deg: max_alt_deg,
            max_altitude_time,
            min_airmass: max_alt_deg.and_then(kasten_young),
        }
    }
}

/// A root of `f` near the guess `s0` whose slope there is about `df`: a
/// Newton step, then secant steps, to [`REFINE_TOL_S`], kept inside
/// `[lo, hi]`. When that does not settle (a guess far off, a slope near zero)
/// the root is bracketed by sampling around the guess and refined by
/// [`illinois`]; with no sign change in reach the guess is returned.
pub fn polish(f: &dyn Fn(f64) -> f64, s0: f64, df: f64, lo: f64, hi: f64) -> f64 {
    let clamp = |x: f64| x.clamp(lo.min(s0), hi.max(s0));
    let (mut x0, mut f0) = (s0, f(s0));
    if f0 == 0.0 {
        return s0;
    }
    let mut x1 = if df.is_finite() && df.abs() > 1e-15 {
        clamp(x0 - f0 / df)
    } else {
        clamp(x0 + 1.0)
    };
    for _ in 0..6 {
        if (x1 - x0).abs() < REFINE_TOL_S {
            return x1;
        }
        let f1 = f(x1);
        if f1 == 0.0 {
            return x1;
        }
        let d = f1 - f0;
        if d == 0.0 || !d.is_finite() {
            break;
        }
        let x2 = clamp(x1 - f1 * (x1 - x0) / d);
        x0 = x1;
        f0 = f1;
        x1 = x2;
    }
    // Bracket around the guess and close in.
    let step = 30.0;
    let f_s0 = f(s0);
    for k in 1..=20 {
        for dir in [-1.0, 1.0] {
            let a = s0 + dir * (k - 1) as f64 * step;
            let b = s0 + dir * k as f64 * step;
            let (a, b) = if a < b { (a, b) } else { (b, a) };
            if a < lo.min(s0) || b > hi.max(s0) {
                continue;
            }
            let (fa, fb) = (
                if a == s0 { f_s0 } else { f(a) },
                if b == s0 { f_s0 } else { f(b) },
            );
            if (fa >= 0.0) != (fb >= 0.0) {
                let mut g = |x: f64| f(x);
                return illinois(&mut g, a, fa, b, fb, REFINE_TOL_S);
            }
        }
    }
    s0
}

/// Where `f` ≥ 0 over `[lo, hi]`, by sampling every `step_s` seconds (at
/// least once) and refining each sign change with [`illinois`] to `tol_s`;
/// the intervals are appended to `out`, joined to its last one when they touch.
pub fn sampled_into(
    f: &dyn Fn(f64) -> f64,
    lo: f64,
    hi: f64,
    step_s: f64,
    tol_s: f64,
    out: &mut Vec<(f64, f64)>,
) {
    if hi <= lo {
        return;
    }
    let n = ((hi - lo) / step_s).ceil().max(1.0) as usize;
    let h = (hi - lo) / n as f64;
    let mut s0 = lo;
    let mut f0 = f(lo);
    let mut open = (f0 >= 0.0).then_some(lo);
    for j in 1..=n {
        let s1 = if j == n { hi } else { lo + h * j as f64 };
        let f1 = f(s1);
        if (f0 >= 0.0) != (f1 >= 0.0) {
            let mut g = |x: f64| f(x);
            let x = illinois(&mut g, s0, f0, s1, f1, tol_s);
            if f1 >= 0.0 {
                open = Some(x);
            } else if let Some(o) = open.take() {
                push_merged(out, (o, x));
            }
        }
        s0 = s1;
        f0 = f1;
    }
    if let Some(o) = open {
        push_merged(out, (o, hi));
    }
}

/// [`sampled_into`] to [`REFINE_TOL_S`], as a new list.
fn sampled_intervals(f: &dyn Fn(f64) -> f64, lo: f64, hi: f64, step_s: f64) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    sampled_into(f, lo, hi, step_s, REFINE_TOL_S, &mut out);
    out
}

/// Append an interval, joining it to the last one when they touch.
pub fn push_merged(out: &mut Vec<(f64, f64)>, iv: (f64, f64)) {
    if let Some(last) = out.last_mut()
        && iv.0 <= last.1 + 1e-6
    {
        last.1 = last.1.max(iv.1);
        return;
    }
    out.push(iv);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::night::Night;
    use chrono::NaiveDate;

    /// Places from pole to pole (near-circumpolar, barely rising, never
    /// rising at both sites), at many right ascensions.
    fn places() -> Vec<CatalogPlace> {
        (0..90)
            .map(|i| CatalogPlace::fixed_deg(i as f64 * 37.3 % 360.0, -89.5 + i as f64 * 2.0))
            .collect()
    }

    #[test]
    fn closed_form_sides_agree_with_the_exact_place() {
        // Where the closed form is trusted for a side of a threshold
        // (`clearly_above`), the exact geometric and observed altitudes
        // (SOFA `atioq`) are on that side too: every hour of two nights at
        // two sites, thresholds from below the horizon to near the zenith.
        let sites = crate::io::sites::catalogue().unwrap();
        let mut trusted = 0;
        for site in sites.iter().take(2) {
            for day in ["2026-06-21", "2026-12-01"] {
                let night = Night::new(site, day.parse::<NaiveDate>().unwrap()).unwrap();
                let frame = &night.sky;
                for place in places() {
                    let track = frame.track(&place);
                    for lim_deg in [-1.0, STAR_RISE_SET_DEG, 0.0, 15.0, 30.0, 60.0, 89.0] {
                        let lim = f64::to_radians(lim_deg);
                        let g_lim = frame.refraction().geometric(lim);
                        let mut s = 0.0;
                        while s <= frame.span_s() {
                            if let Some(up) = track.clearly_above(s, lim) {
                                assert_eq!(up, track.alt_geom_rad(s) >= lim, "{place:?} {s}");
                                trusted += 1;
                            }
                            if let Some(up) = track.clearly_above(s, g_lim) {
                                assert_eq!(up, track.alt_az_rad(s).0 >= lim, "{place:?} {s}");
                            }
                            s += 3600.0;
                        }
                    }
                }
            }
        }
        assert!(trusted > 10_000, "{trusted}");
    }

    #[test]
    fn closed_form_hour_angle_is_within_its_margin() {
        // The exact hour angle (SOFA `atioq`, `Track::ha_rad`) against the
        // closed form's, every 20 minutes of two nights at two sites, places
        // from pole to pole: well inside the margin `ha_sure_rad` allows.
        let sites = crate::io::sites::catalogue().unwrap();
        let (mut checked, mut worst) = (0usize, 0.0f64);
        for site in sites.iter().take(2) {
            for day in ["2026-06-21", "2026-12-01"] {
                let night = Night::new(site, day.parse::<NaiveDate>().unwrap()).unwrap();
                let frame = &night.sky;
                for place in places() {
                    let track = frame.track(&place);
                    let Some(m) = track.ha_sure_rad() else {
                        continue;
                    };
                    let mut s = 0.0;
                    while s <= frame.span_s() {
                        let lin = sofars::vm::anpm(track.ha_linear(s));
                        let d = sofars::vm::anpm(lin - track.ha_rad(s)).abs();
                        worst = worst.max(d / m);
                        checked += 1;
                        s += 1200.0;
                    }
                }
            }
        }
        assert!(
            worst < 0.5 && checked > 10_000,
            "{worst} of the margin, {checked}"
        );
    }

    #[test]
    fn sketch_is_the_track() {
        // A sketch completed is the track, to the bit; its closed form is
        // the track's.
        let site = crate::io::sites::resolve("pampa-lucero").unwrap();
        let night = Night::new(&site, "2027-03-01".parse::<NaiveDate>().unwrap()).unwrap();
        for place in places() {
            let sketch = night.sky.sketch(&place);
            let track = night.sky.track(&place);
            assert_eq!(
                sketch.transits_linear(-1e6, 1e6),
                track.transits_linear(-1e6, 1e6)
            );
            let done = sketch.track(&place);
            let bits = |t: &Track| {
                let mut v: Vec<u64> = t.ri.iter().chain(&t.di).map(|x| x.to_bits()).collect();
                v.extend([t.ha_mid, t.a, t.b].map(f64::to_bits));
                v
            };
            assert_eq!(bits(&done), bits(&track));
        }
    }

    #[test]
    fn windows_lie_inside_their_bound() {
        // Every window (and the transit `windows_and_transit` gives) lies
        // inside the closed form's bound, at two sites (one with a horizon
        // mask), limits from the horizon up, nights through a year.
        let sites = crate::io::sites::catalogue().unwrap();
        let (mut bounded, mut windows) = (0usize, 0usize);
        for site in sites.iter().take(2) {
            for day in 0..12 {
                let date = NaiveDate::from_ymd_opt(2026, 1 + day, 9).unwrap();
                let night = Night::new(site, date).unwrap();
                let frame = &night.sky;
                for (alt, sun) in [(0.0, -0.8), (20.0, -12.0), (41.8, -18.0), (70.0, -12.0)] {
                    let lim = Limits::new(alt, sun).unwrap();
                    let dark = night.dark_intervals(sun);
                    let dark_s: Vec<(f64, f64)> = dark
                        .iter()
                        .map(|(a, b)| (frame.offset(*a), frame.offset(*b)))
                        .collect();
                    for place in places() {
                        let track = frame.track(&place);
                        let tn = track.windows_night(site, &dark, &lim);
                        let (w, tr) = track.windows_and_transit(site, &dark, &lim);
                        assert_eq!(w, tn.windows);
                        if let Some(t) = tr {
                            assert_eq!(Some(t), tn.transit.t);
                        } else if let Some(t) = tn.transit.t {
                            assert!(!w.iter().any(|(a, b)| t >= *a && t <= *b));
                        }
                        let Some(bound) = frame.sketch(&place).windows_bound(&dark_s, alt) else {
                            continue;
                        };
                        bounded += 1;
                        for (a, b) in &tn.windows {
                            let (a, b) = (frame.offset(*a), frame.offset(*b));
                            assert!(
                                bound.iter().any(|(lo, hi)| *lo < a && b < *hi),
                                "{} {date} {alt} {place:?}: ({a}, {b}) outside {bound:?}",
                                site.name
                            );
                            windows += 1;
                        }
                    }
                }
            }
        }
        assert!(bounded > 6000 && windows > 2000, "{bounded} {windows}");
    }

    #[test]
    fn highest_skips_only_lower_candidates() {
        // The highest altitude in the dark is the same bits as evaluating
        // every candidate (the dark ends and the transits inside), whichever
        // candidates the closed form lets it skip.
        let sites = crate::io::sites::catalogue().unwrap();
        let (mut cases, mut multi) = (0usize, 0usize);
        for site in sites.iter().take(2) {
            for day in ["2026-06-21", "2026-12-01"] {
                let night = Night::new(site, day.parse::<NaiveDate>().unwrap()).unwrap();
                let frame = &night.sky;
                for sun in [-0.8, -12.0, -18.0] {
                    let dark: Vec<(f64, f64)> = night
                        .dark_intervals(sun)
                        .iter()
                        .map(|(a, b)| (frame.offset(*a), frame.offset(*b)))
                        .collect();
                    for place in places() {
                        let track = frame.track(&place);
                        let transits = track.transits(0.0, frame.span_s());
                        let mut want: Option<(f64, f64)> = None;
                        let mut n = 0;
                        for &(d0, d1) in &dark {
                            let inside = transits.iter().copied().filter(|s| *s >= d0 && *s < d1);
                            for s in std::iter::once(d0).chain(inside).chain(std::iter::once(d1)) {
                                let alt = track.alt_az_rad(s).0;
                                n += 1;
                                if want.is_none_or(|b| alt > b.0) {
                                    want = Some((alt, s));
                                }
                            }
                        }
                        let got = track.highest_among(&dark, &transits);
                        assert_eq!(
                            got.map(|(a, s)| (a.to_bits(), s.to_bits())),
                            want.map(|(a, s)| (a.to_bits(), s.to_bits())),
                            "{} {day} {sun} {place:?}",
                            site.name
                        );
                        cases += 1;
                        multi += usize::from(n > 1);
                    }
                }
            }
        }
        assert!(cases == 2 * 2 * 3 * 90 && multi > 500, "{cases} {multi}");
    }
}
