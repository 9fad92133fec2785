//! ICRS → observed places through SOFA: one astrometry context per instant and
//! site, shared by every target (SOFA `apco13`, then `atciq` + `atioq`).
//!
//! Two ways to build a context:
//! - [`Context::exact`] is SOFA `apco13` (IAU 2006/2000A precession-nutation,
//!   full `epv00` ephemeris) at that instant, taken step by step through the
//!   sofars routines it calls so its Earth is kept; this is what `rung where` uses.
//! - [`NightFrame::context`] builds it with SOFA `apco` from the slowly varying
//!   quantities (CIP X, Y, CIO locator s, the Earth's barycentric and
//!   heliocentric position and velocity) evaluated at three instants of the
//!   night and interpolated quadratically, with the Earth rotation angle exact
//!   at each instant. Over a 24-hour span the interpolation error is below
//!   0.01″ in the CIP and below 1 km in the Earth's position (see the test
//!   `night_frame_matches_exact_context`).

use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::error::{Result, RungError};
use sofars::astro::{IauAstrom, ab, apco, atciq, atioq, refco};
use sofars::consts::DAU;
use std::f64::consts::PI;

/// Effective wavelength for refraction, micrometres (V band; common practice).
pub const REFRACTION_WL_UM: f64 = 0.55;

/// Speed of light, au per day (IAU 2012 au, SI c).
const C_AU_PER_DAY: f64 = 299_792_458.0 * 86_400.0 / DAU;

/// A place on the sky as seen from the site at one instant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Observed {
    /// Azimuth, radians, north 0, east π/2 (geometric; refraction does not change it).
    pub az_rad: f64,
    /// Observed (refracted) altitude, radians.
    pub alt_rad: f64,
    /// Geometric (unrefracted) topocentric altitude, radians.
    pub alt_geom_rad: f64,
    /// Topocentric hour angle (unrefracted, CIO-based local apparent), radians in (−π, π].
    pub ha_rad: f64,
    /// Topocentric apparent declination (unrefracted), radians.
    pub dec_rad: f64,
}

impl Observed {
    /// Unit vector in the horizon frame (x north, y east, z up), geometric.
    pub fn unit(&self) -> [f64; 3] {
        let (sa, ca) = self.az_rad.sin_cos();
        let (se, ce) = self.alt_geom_rad.sin_cos();
        [ce * ca, ce * sa, se]
    }

    /// Angular separation from another observed place, radians (geometric directions).
    pub fn separation_rad(&self, other: &Observed) -> f64 {
        sep_unit(&self.unit(), &other.unit())
    }
}

/// Angle between two unit vectors, robust near 0 and π.
pub fn sep_unit(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    let cross = [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ];
    let s = (cross[0].powi(2) + cross[1].powi(2) + cross[2].powi(2)).sqrt();
    let c = a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
    s.atan2(c)
}

/// A catalogue place: ICRS at epoch J2000.0 with optional space motion.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CatalogPlace {
    /// Right ascension, radians (ICRS).
    pub ra_rad: f64,
    /// Declination, radians (ICRS).
    pub dec_rad: f64,
    /// Proper motion in RA as dα/dt (not × cos δ), radians per Julian year.
    pub pm_ra_rad_yr: f64,
    /// Proper motion in Dec, radians per Julian year.
    pub pm_dec_rad_yr: f64,
    /// Parallax, arcseconds.
    pub parallax_arcsec: f64,
    /// Radial velocity, km/s (positive receding).
    pub rv_kms: f64,
}

impl CatalogPlace {
    /// A fixed place (no space motion) from ICRS degrees.
    pub fn fixed_deg(ra_deg: f64, dec_deg: f64) -> Self {
        CatalogPlace {
            ra_rad: ra_deg.to_radians(),
            dec_rad: dec_deg.to_radians(),
            ..Default::default()
        }
    }
}

/// Star-independent astrometry for one site and instant, with and without refraction.
#[derive(Debug, Clone, Copy)]
pub struct Context {
    /// The instant.
    pub t: Instant,
    astrom: IauAstrom,
    astrom_geo: IauAstrom,
    /// Earth heliocentric position (au) and velocity (au/d), BCRS axes.
    earth_helio: [[f64; 3]; 2],
    /// Earth barycentric position (au) and velocity (au/d), BCRS axes.
    earth_bary: [[f64; 3]; 2],
    /// Observer's geocentric position, au, GCRS.
    obs_geo_au: [f64; 3],
    tt: (f64, f64),
    /// The Moon's geocentric position and velocity when the maker of the
    /// context already has them (a night interpolates them from its own SOFA
    /// `moon98` samples); otherwise `moon98` is called when asked.
    moon_pv: Option<[[f64; 3]; 2]>,
    /// TDB − TT at the site, seconds, when the maker has it (a night's frame
    /// interpolates SOFA `dtdb`).
    tdb_minus_tt_s: Option<f64>,
}

/// Moon positions kept per thread by [`Context::moon_geo_pv`]; the cache is
/// emptied when full.
const MOON_CACHE_LEN: usize = 4096;

/// The most contexts (about 1 kB each) one generation of [`EXACT_CACHE`]
/// holds: a plan of 1,000 targets asks about 31,000 distinct instants.
const EXACT_GENERATION_LEN: usize = 1 << 15;

thread_local! {
    static MOON_CACHE: std::cell::RefCell<std::collections::HashMap<[u64; 2], [[f64; 3]; 2]>> =
        std::cell::RefCell::new(std::collections::HashMap::new());
}

/// The contexts [`Context::exact`] computed, shared by all threads, keyed by
/// the exact bits of the site and the instant. Two generations: a context is
/// added to (or, asked again, moved into) the newer; when the newer is full
/// it becomes the older and the older is dropped, so what was asked lately
/// stays and the cache never passes two generations.
struct ExactCache {
    newer: std::collections::HashMap<[u64; 8], Context>,
    older: std::collections::HashMap<[u64; 8], Context>,
}

impl ExactCache {
    fn get(&mut self, key: &[u64; 8]) -> Option<Context> {
        if let Some(c) = self.newer.get(key) {
            return Some(*c);
        }
        let c = self.older.remove(key)?;
        self.insert(*key, c);
        Some(c)
    }

    fn insert(&mut self, key: [u64; 8], c: Context) {
        if self.newer.len() >= EXACT_GENERATION_LEN {
            self.older = std::mem::take(&mut self.newer);
        }
        self.newer.insert(key, c);
    }
}

static EXACT_CACHE: std::sync::LazyLock<std::sync::Mutex<ExactCache>> =
    std::sync::LazyLock::new(|| {
        std::sync::Mutex::new(ExactCache {
            newer: std::collections::HashMap::new(),
            older: std::collections::HashMap::new(),
        })
    });

/// The shared cache, locked (a panic elsewhere while it was held leaves
/// whole contexts only, which are still right).
fn exact_cache() -> std::sync::MutexGuard<'static, ExactCache> {
    EXACT_CACHE.lock().unwrap_or_else(|e| e.into_inner())
}

fn site_refraction(site: &Site) -> (f64, f64, f64, f64) {
    (
        site.pressure_hpa(),
        site.temperature_c,
        site.humidity,
        REFRACTION_WL_UM,
    )
}

impl Context {
    /// Full SOFA chain at this instant (`apco13`, DUT1 = 0, no polar motion).
    ///
    /// The answer is a pure function of the site's place and weather and of
    /// the instant, so the contexts computed are kept for all threads
    /// ([`ExactCache`], keyed by the exact bits of both) and the same context
    /// is handed back when asked again: a plan asks a target's epochs for
    /// its proposal, again for the fill's base and again for its outcome
    /// (often on another thread, and after tens of thousands of other
    /// instants), and several targets' fill candidates fall at the same
    /// instant (the start of a night's window).
    pub fn exact(site: &Site, t: Instant) -> Result<Self> {
        let key = [
            site.lat_deg.to_bits(),
            site.lon_deg.to_bits(),
            site.elev_m.to_bits(),
            site.pressure_hpa().to_bits(),
            site.temperature_c.to_bits(),
            site.humidity.to_bits(),
            t.utc1.to_bits(),
            t.utc2.to_bits(),
        ];
        if let Some(c) = exact_cache().get(&key) {
            return Ok(c);
        }
        // Computed without the lock held: two threads asking the same new
        // instant at once both compute it, to the same bits.
        let c = Self::exact_uncached(site, t)?;
        exact_cache().insert(key, c);
        Ok(c)
    }

    /// [`Self::exact`] without the cache.
    fn exact_uncached(site: &Site, t: Instant) -> Result<Self> {
        // SOFA apco13 unwraps epv00, which has no answer outside 1900-2100: never
        // let an out-of-span instant reach it.
        t.check_span()?;
        let (phpa, tc, rh, wl) = site_refraction(site);
        let mut astrom = IauAstrom::default();
        // SOFA apco13's own steps, each the sofars routine apco13 calls, in
        // its order and with its arguments (DUT1 and the polar motion as
        // above), so `astrom` is apco13's to the bit; the Earth's position
        // and velocity it finds (epv00 at its TT) are kept for the context
        // instead of being asked of epv00 a second time (the dearest part
        // of a context after the nutation).
        let steps = || -> std::result::Result<_, i32> {
            use sofars::{erst::era00, pnp, ts};
            let (tai1, tai2) = ts::utctai(t.utc1, t.utc2)?;
            let (tt1, tt2) = ts::taitt(tai1, tai2)?;
            let (ut11, ut12) = ts::utcut1(t.utc1, t.utc2, crate::astro::time::DUT1_S)?;
            let (ehpv, ebpv) = sofars::eph::epv00(tt1, tt2).ok_or(1)?;
            let r = pnp::pnm06a(tt1, tt2);
            let (x, y) = pnp::bpn2xy(&r);
            let s = pnp::s06(tt1, tt2, x, y);
            let theta = era00(ut11, ut12);
            let sp = pnp::sp00(tt1, tt2);
            let (refa, refb) = refco(phpa, tc, rh, wl);
            Ok(((tt1, tt2), ehpv, ebpv, x, y, s, theta, sp, refa, refb))
        };
        let ((tt1, tt2), ehpv, ebpv, x, y, s, theta, sp, refa, refb) =
            steps().map_err(|status| RungError::Sofa {
                routine: "apco13",
                status,
            })?;
        apco(
            tt1,
            tt2,
            &ebpv,
            &ehpv[0],
            x,
            y,
            s,
            theta,
            site.lon_rad(),
            site.lat_rad(),
            site.elev_m,
            0.0,
            0.0,
            sp,
            refa,
            refb,
            &mut astrom,
        );
        let tt = t.tt();
        // The context's TT is the instant's own; its Earth is apco13's when
        // the two TTs are the same bits (always, while the instant's TT
        // follows SOFA's), else epv00 at the instant's TT as before.
        let same = tt.0.to_bits() == tt1.to_bits() && tt.1.to_bits() == tt2.to_bits();
        let (eh, eb) = if same {
            (ehpv, ebpv)
        } else {
            sofars::eph::epv00(tt.0, tt.1).ok_or(RungError::Sofa {
                routine: "epv00",
                status: 1,
            })?
        };
        Ok(Self::finish(t, tt, astrom, eh, eb))
    }

    fn finish(
        t: Instant,
        tt: (f64, f64),
        astrom: IauAstrom,
        eh: [[f64; 3]; 2],
        eb: [[f64; 3]; 2],
    ) -> Self {
        let mut astrom_geo = astrom;
        astrom_geo.refa = 0.0;
        astrom_geo.refb = 0.0;
        let obs_geo_au = [
            astrom.eb[0] - eb[0][0],
            astrom.eb[1] - eb[0][1],
            astrom.eb[2] - eb[0][2],
        ];
        Context {
            t,
            astrom,
            astrom_geo,
            earth_helio: eh,
            earth_bary: eb,
            obs_geo_au,
            tt,
            moon_pv: None,
            tdb_minus_tt_s: None,
        }
    }

    /// The same context with the Moon's geocentric position and velocity
    /// (au, au/d, GCRS) given instead of computed by `moon98` when asked.
    pub(crate) fn with_moon(mut self, pv: [[f64; 3]; 2]) -> Self {
        self.moon_pv = Some(pv);
        self
    }

    /// TDB − TT at the site (seconds) when the context carries it (contexts
    /// of a night's frame do, from SOFA `dtdb` interpolated through the night).
    pub fn tdb_minus_tt_s(&self) -> Option<f64> {
        self.tdb_minus_tt_s
    }

    /// TT of the context as a two-part Julian date.
    pub fn tt(&self) -> (f64, f64) {
        self.tt
    }

    /// Earth's barycentric position, au (BCRS axes), from SOFA `epv00`.
    pub fn earth_bary_au(&self) -> [f64; 3] {
        self.earth_bary[0]
    }

    /// Earth's heliocentric position, au (BCRS axes), from SOFA `epv00`.
    pub fn earth_helio_au(&self) -> [f64; 3] {
        self.earth_helio[0]
    }

    /// Observer's barycentric position, au.
    pub fn observer_bary_au(&self) -> [f64; 3] {
        self.astrom.eb
    }

    /// Observed place of a catalogue star: proper motion and parallax to the
    /// date, light deflection, aberration, precession-nutation (`atciq`), then
    /// Earth rotation, diurnal aberration and refraction (`atioq`).
    pub fn observe(&self, p: &CatalogPlace) -> Observed {
        let mut a = self.astrom;
        let (ri, di) = atciq(
            p.ra_rad,
            p.dec_rad,
            p.pm_ra_rad_yr,
            p.pm_dec_rad_yr,
            p.parallax_arcsec,
            p.rv_kms,
            &mut a,
        );
        self.observe_cirs(ri, di)
    }

    /// Observed place from CIRS right ascension and declination (radians).
    pub fn observe_cirs(&self, ri: f64, di: f64) -> Observed {
        let (aob, zob, _hob, _dob, _rob) = atioq(ri, di, &self.astrom);
        let (aog, zog, hog, dog, _rog) = atioq(ri, di, &self.astrom_geo);
        let _ = aog;
        Observed {
            az_rad: aob,
            alt_rad: PI / 2.0 - zob,
            alt_geom_rad: PI / 2.0 - zog,
            ha_rad: sofars::vm::anpm(hog),
            dec_rad: dog,
        }
    }

    /// CIRS place of a topocentric GCRS vector (au), with optional stellar aberration.
    fn gcrs_topo_to_cirs(&self, p: [f64; 3], aberrate: bool) -> (f64, f64) {
        let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
        let mut u = [p[0] / r, p[1] / r, p[2] / r];
        if aberrate {
            u = ab(&u, &self.astrom.v, self.astrom.em, self.astrom.bm1);
        }
        let b = &self.astrom.bpn;
        let c = [
            b[0][0] * u[0] + b[0][1] * u[1] + b[0][2] * u[2],
            b[1][0] * u[0] + b[1][1] * u[1] + b[1][2] * u[2],
            b[2][0] * u[0] + b[2][1] * u[1] + b[2][2] * u[2],
        ];
        let (ri, di) = sofars::vm::c2s(&c);
        (sofars::vm::anp(ri), di)
    }

    /// Geocentric Sun position, au (GCRS axes; the Sun taken at rest at the
    /// heliocentre, so aberration supplies the light-time effect).
    pub fn sun_geo_au(&self) -> [f64; 3] {
        let e = self.earth_helio[0];
        [-e[0], -e[1], -e[2]]
    }

    /// Topocentric observed place of the Sun's centre (SOFA `epv00`).
    pub fn sun(&self) -> Observed {
        let s = self.sun_geo_au();
        let o = self.obs_geo_au;
        let (ri, di) = self.gcrs_topo_to_cirs([s[0] - o[0], s[1] - o[1], s[2] - o[2]], true);
        self.observe_cirs(ri, di)
    }

    /// Geocentric Moon position (au) and velocity (au/d), GCRS (SOFA `moon98`).
    pub fn moon_geo_pv(&self) -> [[f64; 3]; 2] {
        if let Some(pv) = self.moon_pv {
            return pv;
        }
        // A pure function of TT, asked again and again for the same
        // instants (each exposure a method tries at one epoch needs the
        // Moon's sky): each thread keeps the last few thousand.
        let key = [self.tt.0.to_bits(), self.tt.1.to_bits()];
        if let Some(pv) = MOON_CACHE.with(|c| c.borrow().get(&key).copied()) {
            return pv;
        }
        let pv = sofars::eph::moon98(self.tt.0, self.tt.1);
        MOON_CACHE.with(|cache| {
            let mut cache = cache.borrow_mut();
            if cache.len() >= MOON_CACHE_LEN {
                cache.clear();
            }
            cache.insert(key, pv);
        });
        pv
    }

    /// Topocentric observed place of the Moon's centre (SOFA `moon98`), corrected
    /// for light time with the Moon's geocentric velocity; the annual aberration
    /// cancels for a body that shares the Earth's orbital motion.
    pub fn moon(&self) -> Observed {
        let pv = self.moon_geo_pv();
        let o = self.obs_geo_au;
        let mut p = [pv[0][0] - o[0], pv[0][1] - o[1], pv[0][2] - o[2]];
        let r = (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt();
        let tau_d = r / C_AU_PER_DAY;
        for (pi, vi) in p.iter_mut().zip(pv[1].iter()) {
            *pi -= vi * tau_d;
        }
        let (ri, di) = self.gcrs_topo_to_cirs(p, false);
        self.observe_cirs(ri, di)
    }

    /// Topocentric distance of the Moon, km.
    pub fn moon_distance_km(&self) -> f64 {
        let pv = self.moon_geo_pv();
        let o = self.obs_geo_au;
        let d = [pv[0][0] - o[0], pv[0][1] - o[1], pv[0][2] - o[2]];
        (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt() * DAU / 1000.0
    }

    /// Geocentric distance of the Moon, km.
    pub fn moon_geo_distance_km(&self) -> f64 {
        let p = self.moon_geo_pv()[0];
        (p[0] * p[0] + p[1] * p[1] + p[2] * p[2]).sqrt() * DAU / 1000.0
    }

    /// Sun–Moon phase angle seen from the Earth's centre, radians (0 = full Moon).
    pub fn moon_phase_angle_rad(&self) -> f64 {
        let m = self.moon_geo_pv()[0];
        let s = self.sun_geo_au();
        let ms = [s[0] - m[0], s[1] - m[1], s[2] - m[2]];
        let me = [-m[0], -m[1], -m[2]];
        let n1 = norm(&ms);
        let n2 = norm(&me);
        sep_unit(
            &[ms[0] / n1, ms[1] / n1, ms[2] / n1],
            &[me[0] / n2, me[1] / n2, me[2] / n2],
        )
    }

    /// Illuminated fraction of the Moon's disc, k = (1 + cos i)/2 (Meeus,
    /// Astronomical Algorithms, 2nd ed., eq. 48.1).
    pub fn moon_illumination(&self) -> f64 {
        (1.0 + self.moon_phase_angle_rad().cos()) / 2.0
    }

    /// Whether the Moon is waxing (elongation east of the Sun increasing).
    pub fn moon_waxing(&self) -> bool {
        let m = self.moon_geo_pv();
        let s = self.sun_geo_au();
        // The Moon is waxing while its ecliptic longitude runs ahead of the Sun by 0..180°:
        // sign of (s × m) · (angular momentum of the Moon's orbit).
        let h = cross(&m[0], &m[1]);
        let c = cross(&s, &m[0]);
        dot(&c, &h) > 0.0
    }

    /// Light time from the Sun's centre to the Earth's centre, seconds.
    pub fn sun_light_time_s(&self) -> f64 {
        norm(&self.earth_helio[0]) / C_AU_PER_DAY * 86_400.0
    }

    /// Light time from the Moon's centre to the Earth's centre, seconds.
    pub fn moon_light_time_s(&self) -> f64 {
        norm(&self.moon_geo_pv()[0]) / C_AU_PER_DAY * 86_400.0
    }
}

fn norm(a: &[f64; 3]) -> f64 {
    (a[0] * a[0] + a[1] * a[1] + a[2] * a[2]).sqrt()
}
fn dot(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}
fn cross(a: &[f64; 3], b: &[f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

/// Slowly varying astrometry of one site over a span of up to a few days,
/// sampled at three instants and interpolated, so that a context at any instant
/// of the span costs one SOFA `apco` call instead of `apco13`.
#[derive(Debug, Clone)]
pub struct NightFrame {
    site_lon_rad: f64,
    site_lat_rad: f64,
    elev_m: f64,
    refa: f64,
    refb: f64,
    t0: Instant,
    span_s: f64,
    // Samples at 0, 1/2, 1 of the span: x, y, s, s', ebpv (6), ehp (3), eh
    // velocity (3), TDB − TT (s).
    samples: [[f64; SLOW_N]; 3],
}

/// Number of slowly varying quantities a [`NightFrame`] samples.
const SLOW_N: usize = 17;

fn slow_quantities(t: Instant, site: &Site) -> Result<[f64; SLOW_N]> {
    t.check_span()?;
    let (t1, t2) = t.tt();
    // TDB − TT with the site's topocentric term (SOFA dtdb), as Instant::tdb.
    let (u1, u2) = t.ut1();
    let ut_frac = (u1 - 0.5).fract() + u2;
    let ut_frac = ut_frac - ut_frac.floor();
    let (u_km, v_km) = site.spin_axis_uv_km();
    let dtdb = sofars::ts::dtdb(t1, t2, ut_frac, site.lon_rad(), u_km, v_km);
    let r = sofars::pnp::pnm06a(t1, t2);
    let (x, y) = sofars::pnp::bpn2xy(&r);
    let s = sofars::pnp::s06(t1, t2, x, y);
    let sp = sofars::pnp::sp00(t1, t2);
    let (eh, eb) = sofars::eph::epv00(t1, t2).ok_or(RungError::Sofa {
        routine: "epv00",
        status: 1,
    })?;
    Ok([
        x, y, s, sp, eb[0][0], eb[0][1], eb[0][2], eb[1][0], eb[1][1], eb[1][2], eh[0][0],
        eh[0][1], eh[0][2], eh[1][0], eh[1][1], eh[1][2], dtdb,
    ])
}

impl NightFrame {
    /// Sample the slowly varying quantities over `[start, end]` (at most 4 days).
    pub fn new(site: &Site, start: Instant, end: Instant) -> Result<Self> {
        let span_s = end.seconds_since(&start);
        if !(span_s > 0.0 && span_s <= 4.0 * 86_400.0) {
            return Err(RungError::invalid(
                "time span",
                format!("{span_s} s is not within (0, 4 days] for one night frame"),
            ));
        }
        let mid = start.add_seconds(span_s / 2.0);
        let (phpa, tc, rh, wl) = site_refraction(site);
        let (refa, refb) = refco(phpa, tc, rh, wl);
        Ok(NightFrame {
            site_lon_rad: site.lon_rad(),
            site_lat_rad: site.lat_rad(),
            elev_m: site.elev_m,
            refa,
            refb,
            t0: start,
            span_s,
            samples: [
                slow_quantities(start, site)?,
                slow_quantities(mid, site)?,
                slow_quantities(end, site)?,
            ],
        })
    }

    /// Start of the span.
    pub fn start(&self) -> Instant {
        self.t0
    }

    /// End of the span.
    pub fn end(&self) -> Instant {
        self.t0.add_seconds(self.span_s)
    }

    /// The slowly varying quantities at `t`, interpolated: CIP X, Y, CIO
    /// locator s, TIO locator s′, the Earth's barycentric position and
    /// velocity (au, au/d) and heliocentric position and velocity, TDB − TT
    /// at the site (seconds; its daily topocentric term of about 2 µs is
    /// followed only as far as three samples follow it).
    fn slow(&self, t: Instant) -> [f64; SLOW_N] {
        let u = t.seconds_since(&self.t0) / self.span_s; // 0..1
        // Quadratic Lagrange weights at nodes 0, 0.5, 1.
        let w0 = 2.0 * (u - 0.5) * (u - 1.0);
        let w1 = -4.0 * u * (u - 1.0);
        let w2 = 2.0 * u * (u - 0.5);
        let mut q = [0.0; SLOW_N];
        for (i, qi) in q.iter_mut().enumerate() {
            *qi = w0 * self.samples[0][i] + w1 * self.samples[1][i] + w2 * self.samples[2][i];
        }
        q
    }

    /// Star-independent astrometry for the geocentre at `t` (SOFA `apci`
    /// from the interpolated quantities): ICRS to geocentric CIRS, without
    /// the observer's diurnal motion, which [`NightFrame::site_astrom`] adds.
    /// A CIRS place from it varies smoothly through the night.
    pub(crate) fn geocentric_astrom(&self, t: Instant) -> IauAstrom {
        let q = self.slow(t);
        let (t1, t2) = t.tt();
        let eb = [[q[4], q[5], q[6]], [q[7], q[8], q[9]]];
        let ehp = [q[10], q[11], q[12]];
        let mut astrom = IauAstrom::default();
        sofars::astro::apci(t1, t2, &eb, &ehp, q[0], q[1], q[2], &mut astrom);
        astrom
    }

    /// The site's terms for CIRS to observed at `t` (SOFA `apio`: local Earth
    /// rotation angle, diurnal aberration, refraction constants), with and
    /// without refraction.
    pub(crate) fn site_astrom(&self, t: Instant) -> (IauAstrom, IauAstrom) {
        let q = self.slow(t);
        let (u1, u2) = t.ut1();
        let theta = sofars::erst::era00(u1, u2);
        let mut astrom = IauAstrom::default();
        sofars::astro::apio(
            q[3],
            theta,
            self.site_lon_rad,
            self.site_lat_rad,
            self.elev_m,
            0.0,
            0.0,
            self.refa,
            self.refb,
            &mut astrom,
        );
        let mut geo = astrom;
        geo.refa = 0.0;
        geo.refb = 0.0;
        (astrom, geo)
    }

    /// The Earth's barycentric position at `t`, au (BCRS axes): the
    /// [`Context::earth_bary_au`] of [`Self::context`]`(t)`, bit for bit,
    /// without the rest of the context.
    pub fn earth_bary_au(&self, t: Instant) -> [f64; 3] {
        let q = self.slow(t);
        [q[4], q[5], q[6]]
    }

    /// Context at an instant inside (or slightly outside) the span.
    pub fn context(&self, t: Instant) -> Context {
        let q = self.slow(t);
        let (t1, t2) = t.tt();
        let (u1, u2) = t.ut1();
        let theta = sofars::erst::era00(u1, u2);
        let eb = [[q[4], q[5], q[6]], [q[7], q[8], q[9]]];
        let eh = [[q[10], q[11], q[12]], [q[13], q[14], q[15]]];
        let ehp = eh[0];
        let mut astrom = IauAstrom::default();
        apco(
            t1,
            t2,
            &eb,
            &ehp,
            q[0],
            q[1],
            q[2],
            theta,
            self.site_lon_rad,
            self.site_lat_rad,
            self.elev_m,
            0.0,
            0.0,
            q[3],
            self.refa,
            self.refb,
            &mut astrom,
        );
        let mut c = Context::finish(t, (t1, t2), astrom, eh, eb);
        c.tdb_minus_tt_s = Some(q[16]);
        c
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::time::parse_instant;

    fn site() -> Site {
        Site::new("t", -30.2, -70.7, 2200.0, "UTC".parse().unwrap()).unwrap()
    }

    #[test]
    fn night_frame_matches_exact_context() {
        let s = site();
        let t0 = parse_instant("2026-03-10T12:00:00Z").unwrap();
        let t1 = t0.add_seconds(86_400.0);
        let nf = NightFrame::new(&s, t0, t1).unwrap();
        let star = CatalogPlace::fixed_deg(83.6, -5.4);
        for k in 0..24 {
            let t = t0.add_seconds(k as f64 * 3600.0 + 137.0);
            let a = Context::exact(&s, t).unwrap();
            let b = nf.context(t);
            let oa = a.observe(&star);
            let ob = b.observe(&star);
            let d = oa.separation_rad(&ob).to_degrees() * 3600.0;
            assert!(d < 0.01, "star differs by {d} arcsec at hour {k}");
            let ds = a.sun().separation_rad(&b.sun()).to_degrees() * 3600.0;
            assert!(ds < 0.05, "sun differs by {ds} arcsec");
            let dm = a.moon().separation_rad(&b.moon()).to_degrees() * 3600.0;
            assert!(dm < 0.05, "moon differs by {dm} arcsec");
        }
    }

    #[test]
    fn exact_context_is_sofa_apco13_to_the_bit() {
        // The exact context takes apco13's steps one sofars routine at a
        // time (to keep its Earth): its astrometry must be sofars apco13's
        // own, bit for bit, and its Earth epv00's at the instant's TT.
        let s = site();
        for (k, iso) in [
            "2026-03-10T12:00:00Z",
            "2026-12-02T01:00:00.25Z",
            "2027-06-30T23:59:59Z",
            "2016-12-31T23:59:59.5Z",
        ]
        .iter()
        .enumerate()
        {
            let t = parse_instant(iso).unwrap();
            let c = Context::exact_uncached(&s, t).unwrap();
            let (phpa, tc, rh, wl) = site_refraction(&s);
            let mut astrom = IauAstrom::default();
            let mut eo = 0.0;
            sofars::astro::apco13(
                t.utc1,
                t.utc2,
                crate::astro::time::DUT1_S,
                s.lon_rad(),
                s.lat_rad(),
                s.elev_m,
                0.0,
                0.0,
                phpa,
                tc,
                rh,
                wl,
                &mut astrom,
                &mut eo,
            )
            .unwrap();
            assert_eq!(format!("{:?}", c.astrom), format!("{astrom:?}"), "case {k}");
            let tt = t.tt();
            let (eh, eb) = sofars::eph::epv00(tt.0, tt.1).unwrap();
            assert_eq!(
                format!("{:?}", c.earth_helio),
                format!("{eh:?}"),
                "case {k}"
            );
            assert_eq!(format!("{:?}", c.earth_bary), format!("{eb:?}"), "case {k}");
        }
    }

    #[test]
    fn exact_cache_keeps_what_was_asked_lately() {
        // A context asked from another thread comes back with the bits of
        // the one computed here; the generations keep a context asked again
        // and drop one not asked for two generations.
        let s = site();
        let t = parse_instant("2027-02-14T03:00:00Z").unwrap();
        let here = Context::exact(&s, t).unwrap();
        let there = std::thread::spawn(move || Context::exact(&site(), t).unwrap())
            .join()
            .unwrap();
        let direct = Context::exact_uncached(&s, t).unwrap();
        for c in [&here, &there] {
            assert_eq!(format!("{:?}", c.astrom), format!("{:?}", direct.astrom));
            assert_eq!(
                format!("{:?}", c.earth_bary),
                format!("{:?}", direct.earth_bary)
            );
        }
        let mut cache = ExactCache {
            newer: std::collections::HashMap::new(),
            older: std::collections::HashMap::new(),
        };
        let key = |i: usize| [i as u64; 8];
        let (kept, dropped) = (key(usize::MAX), key(usize::MAX - 1));
        cache.insert(kept, direct);
        cache.insert(dropped, direct);
        for i in 0..EXACT_GENERATION_LEN {
            cache.insert(key(i), direct);
        }
        // Both now in the older generation; asking one moves it forward.
        assert!(cache.older.contains_key(&kept) && cache.older.contains_key(&dropped));
        assert!(cache.get(&kept).is_some());
        for i in EXACT_GENERATION_LEN..2 * EXACT_GENERATION_LEN {
            cache.insert(key(i), direct);
        }
        assert!(cache.get(&kept).is_some());
        assert!(cache.get(&dropped).is_none());
        assert!(cache.newer.len() + cache.older.len() <= 2 * EXACT_GENERATION_LEN);
    }

    #[test]
    fn light_times_are_facts_of_the_trade() {
        // Common practice: sunlight takes about 8.3 minutes (490..508 s over a year,
        // from perihelion 0.983 au to aphelion 1.017 au); the Moon is about 1.3 light-seconds away.
        let s = site();
        for m in 1..=12 {
            let t = parse_instant(&format!("2026-{m:02}-15T00:00:00Z")).unwrap();
            let c = Context::exact(&s, t).unwrap();
            let ls = c.sun_light_time_s();
            assert!((490.0..508.0).contains(&ls), "sun light time {ls}");
            let lm = c.moon_light_time_s();
            assert!((1.19..1.36).contains(&lm), "moon light time {lm}");
        }
    }
}
