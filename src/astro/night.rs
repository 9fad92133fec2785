//! The night of a date: from local noon of that date to the next local noon,
//! with its Sun and Moon events and the visibility of targets in it.

use crate::astro::events::{Crossing, crossings_on_grid, grid, positive_intervals};
use crate::astro::frames::{CatalogPlace, Context, NightFrame, Observed};
use crate::astro::site::Site;
use crate::astro::time::{Instant, VALID_FROM_JD, VALID_TO_JD};
use crate::astro::visibility::{SkyFrame, Track};
pub use crate::astro::window::{
    ASTRONOMICAL_DEG, CIVIL_DEG, Event, Limits, NAUTICAL_DEG, STAR_RISE_SET_DEG, SUN_RISE_SET_DEG,
    TargetNight, intersect_intervals,
};
use crate::error::{Result, RungError};
use chrono::{NaiveDate, NaiveTime, TimeZone};
use std::sync::{Arc, OnceLock};

/// Grid spacing used to bracket the Sun and Moon events, seconds (each then
/// refined by regula falsi, `astro::events`).
pub const GRID_STEP_S: f64 = 600.0;
/// Most nights kept by [`Night::shared`] (about 0.13 MB each: three years of nights).
pub const NIGHT_CACHE_MAX: usize = 1200;
/// Tolerance to which every event time is refined, seconds (reported times
/// are then rounded to the second).
pub const EVENT_TOL_S: f64 = 0.001;

/// An altitude as degrees and arcminutes, e.g. "-0°50′", "-18°".
pub fn fmt_alt(deg: f64) -> String {
    let sign = if deg < 0.0 { "-" } else { "" };
    let total_min = (deg.abs() * 60.0).round() as i64;
    let (d, m) = (total_min / 60, total_min % 60);
    if m == 0 {
        format!("{sign}{d}°")
    } else {
        format!("{sign}{d}°{m:02}′")
    }
}

/// Local noon of a date at the site (the earlier one if the zone repeats it, an
/// hour later if a zone change skips it). For a site whose zone contradicts its
/// longitude by more than a few hours ([`Site::zone_contradicts_longitude`]),
/// mean solar noon of the date at its longitude instead: noon in such a zone
/// falls in the dark and would cut the night in two.
pub fn local_noon(site: &Site, date: NaiveDate) -> Result<Instant> {
    if site.zone_contradicts_longitude() {
        use chrono::Datelike;
        let midnight =
            Instant::from_utc_calendar(date.year(), date.month(), date.day(), 0, 0, 0.0)?;
        return Ok(midnight.add_seconds((12.0 - site.lon_deg / 15.0) * 3600.0));
    }
    let tz = site.timezone;
    for h in [12u32, 13, 11] {
        let naive = date.and_time(NaiveTime::from_hms_opt(h, 0, 0).unwrap_or_default());
        if let Some(dt) = tz.from_local_datetime(&naive).earliest() {
            return Instant::from_zoned(&dt);
        }
    }
    Err(RungError::invalid(
        "date",
        format!("{date} has no local noon in zone {}", tz.name()),
    ))
}

/// The night (local date of its evening, as [`local_noon`] bounds it) that
/// holds the instant `t`.
pub fn night_of(site: &Site, t: Instant) -> NaiveDate {
    if site.zone_contradicts_longitude() {
        let solar = t.to_datetime() + chrono::Duration::seconds((site.lon_deg * 240.0) as i64);
        return (solar - chrono::Duration::hours(12)).date_naive();
    }
    (t.local(&site.timezone) - chrono::Duration::hours(12)).date_naive()
}

/// A night being built: the first caller builds it under this lock, the
/// others wait for it.
type BuildSlot = Arc<std::sync::Mutex<Option<Arc<Night>>>>;

/// An entry of the shared night cache: a night still being built, or the
/// night itself (so that asking a built night takes one count on it).
enum CacheEntry {
    Building(BuildSlot),
    Built(Arc<Night>),
}

/// The nights [`Night::shared`] keeps, by site key and date, and the
/// order they were added in (the oldest quarter is dropped when full).
#[derive(Default)]
struct NightCache {
    slots: std::collections::HashMap<(u64, NaiveDate), CacheEntry>,
    order: std::collections::VecDeque<(u64, NaiveDate)>,
}

/// The shared night cache, locked (a panic elsewhere while it was held
/// leaves whole entries only).
fn night_cache() -> std::sync::MutexGuard<'static, NightCache> {
    static CACHE: OnceLock<std::sync::Mutex<NightCache>> = OnceLock::new();
    CACHE
        .get_or_init(Default::default)
        .lock()
        .unwrap_or_else(|e| e.into_inner())
}

/// A key that tells sites apart for the night cache: every field that
/// changes a night (place, zone, weather, horizon, Sun-avoidance angle).
fn site_key(site: &Site) -> u64 {
    use std::hash::{Hash, Hasher};
    let mut h = std::collections::hash_map::DefaultHasher::new();
    site.name.hash(&mut h);
    site.timezone.name().hash(&mut h);
    for x in [
        site.lat_deg,
        site.lon_deg,
        site.elev_m,
        site.pressure_hpa.unwrap_or(f64::NAN),
        site.temperature_c,
        site.humidity,
        site.sun_avoid_deg,
    ] {
        x.to_bits().hash(&mut h);
    }
    for p in &site.horizon {
        p.az_deg.to_bits().hash(&mut h);
        p.alt_deg.to_bits().hash(&mut h);
    }
    h.finish()
}

/// One night at one site: its span, an interpolating astrometry frame, and a
/// grid of shared contexts with the Sun and Moon already computed.
#[derive(Debug, Clone)]
pub struct Night {
    /// The local date whose evening starts the night.
    pub date: NaiveDate,
    /// The site.
    pub site: Site,
    /// Local noon of `date`.
    pub start: Instant,
    /// Local noon of the next day.
    pub end: Instant,
    /// Interpolating frame for contexts at any instant of the night.
    pub frame: NightFrame,
    /// Bracketing grid.
    pub times: Vec<Instant>,
    /// Contexts on the grid (one per instant, shared by all targets),
    /// without the Moon: [`Night::grid_context`] is the one with it (the
    /// Sun, a target's place and the time are the same in both).
    pub contexts: Vec<Context>,
    /// Geometric altitude of the Sun's centre on the grid, degrees.
    pub sun_alt_deg: Vec<f64>,
    /// Sun on the grid.
    pub sun: Vec<Observed>,
    /// What every target shares for its closed-form visibility
    /// (`astro::visibility`).
    pub sky: SkyFrame,
    /// The Moon through the night, for the contexts of [`Night::context`],
    /// made when first asked: the budget's methods walk hundreds of nights
    /// for their windows and the Sun alone, and look at the Moon on a few.
    moon_table: OnceLock<MoonTable>,
    /// The Moon on the grid and its altitude (degrees), made when first
    /// asked ([`Night::moon`], [`Night::moon_alt_deg`]).
    moon_grid: OnceLock<(Vec<Observed>, Vec<f64>)>,
    /// Dark intervals already found, by Sun limit (degrees).
    dark_cache: DarkCache,
}

/// The Moon's geocentric position and velocity (SOFA `moon98`) every
/// [`MoonTable::STEP_S`] from two hours before a night to two hours after,
/// interpolated by four-point (cubic) Lagrange: the Moon's orbit is smooth
/// on that scale (it turns by 0.55° an hour), and the interpolation errs by
/// well under a metre (0.001″), so a night calls `moon98` 30 times instead of
/// once per context (unit test `moon_table_matches_moon98`).
/// Each node is computed when an instant first needs it: a method that
/// looks at the Moon at one instant of a night pays for four nodes.
#[derive(Debug, Clone)]
struct MoonTable {
    t0: Instant,
    pv: Vec<OnceLock<[[f64; 3]; 2]>>,
}

impl MoonTable {
    const STEP_S: f64 = 3600.0;
    const MARGIN_S: f64 = 7200.0;

    fn new(start: Instant, end: Instant) -> Self {
        let t0 = start.add_seconds(-Self::MARGIN_S);
        let n = ((end.seconds_since(&start) + 2.0 * Self::MARGIN_S) / Self::STEP_S).ceil() as usize;
        MoonTable {
            t0,
            pv: vec![OnceLock::new(); n + 1],
        }
    }

    /// The Moon at node `k` (SOFA `moon98`), computed once.
    fn node(&self, k: usize) -> &[[f64; 3]; 2] {
        self.pv[k].get_or_init(|| {
            let (a, b) = self.t0.add_seconds(k as f64 * Self::STEP_S).tt();
            sofars::eph::moon98(a, b)
        })
    }

    /// The Moon at `t`, or `None` outside the table.
    fn at(&self, t: Instant) -> Option<[[f64; 3]; 2]> {
        let x = t.seconds_since(&self.t0) / Self::STEP_S;
        let i = x.floor() as i64 - 1;
        if i < 0 || i as usize + 3 >= self.pv.len() {
            return None;
        }
        let i = i as usize;
        let u = x - (i + 1) as f64; // in [0, 1) between nodes i+1 and i+2
        // Cubic Lagrange weights at nodes −1, 0, 1, 2.
        let w = [
            -u * (u - 1.0) * (u - 2.0) / 6.0,
            (u + 1.0) * (u - 1.0) * (u - 2.0) / 2.0,
            -(u + 1.0) * u * (u - 2.0) / 2.0,
            (u + 1.0) * u * (u - 1.0) / 6.0,
        ];
        let mut out = [[0.0; 3]; 2];
        for (k, wk) in w.iter().enumerate() {
            for (o, p) in out.iter_mut().zip(self.node(i + k)) {
                for (oj, pj) in o.iter_mut().zip(p) {
                    *oj += wk * pj;
                }
            }
        }
        Some(out)
    }

    /// `c` with the Moon from the table (unchanged outside it).
    fn attach(&self, c: Context) -> Context {
        match self.at(c.t) {
            Some(pv) => c.with_moon(pv),
            None => c,
        }
    }
}

/// Dark intervals of a night by Sun limit, found once and shared by the
/// targets (and clones) of that night.
type DarkCache = std::sync::Arc<std::sync::Mutex<Vec<(f64, Arc<[(Instant, Instant)]>)>>>;

/// Topocentric altitude of the Moon's centre at which its upper limb touches the
/// refracted horizon: −(0°34′ + semidiameter), the semidiameter being
/// 0.2725·π with π the horizontal parallax. This is Meeus's (ch. 15)
/// geocentric h0 = 0.7275·π − 0°34′ moved to topocentric altitude.
pub fn moon_rise_set_topo_deg(ctx: &Context) -> f64 {
    let hp = (6378.14 / ctx.moon_geo_distance_km()).asin().to_degrees();
    -(34.0 / 60.0) - 0.2725 * hp
}

impl Night {
    /// The night that begins on the local evening of `date` at `site`.
    pub fn new(site: &Site, date: NaiveDate) -> Result<Self> {
        let start = local_noon(site, date)?;
        let next = date
            .succ_opt()
            .ok_or_else(|| RungError::invalid("date", "no next day"))?;
        let end = local_noon(site, next).map_err(|e| match e {
            RungError::OutOfSpan { from, to, .. } => RungError::OutOfSpan {
                when: format!("the night of {date} (it ends at local noon of {next})"),
                from,
                to,
            },
            other => other,
        })?;
        Self::spanning(site, date, start, end)
    }

    /// The same as [`Night::new`], from a process-wide cache shared by every
    /// caller (the methods, the budget and the scheduler ask for the same
    /// nights again and again, from many threads). Each night is built once:
    /// a caller that asks while another thread builds it waits for that build
    /// instead of building its own. At most [`NIGHT_CACHE_MAX`] nights are
    /// kept; past that the oldest quarter is dropped.
    pub fn shared(site: &Site, date: NaiveDate) -> Result<Arc<Night>> {
        Self::shared_keyed(site, site_key(site), date)
    }

    /// Every night from `from` to `to` (inclusive) through [`Night::shared`],
    /// the missing ones built in parallel, in date order. The nights already
    /// built are taken under one lock of the cache, not one per night.
    pub fn shared_range(site: &Site, from: NaiveDate, to: NaiveDate) -> Result<Vec<Arc<Night>>> {
        use rayon::prelude::*;
        let key = site_key(site);
        let dates: Vec<NaiveDate> = from.iter_days().take_while(|d| *d <= to).collect();
        let built: Vec<Option<Arc<Night>>> = {
            let c = night_cache();
            dates
                .iter()
                .map(|d| match c.slots.get(&(key, *d)) {
                    Some(CacheEntry::Built(n)) => Some(n.clone()),
                    _ => None,
                })
                .collect()
        };
        dates
            .par_iter()
            .zip(built)
            .map(|(d, b)| match b {
                Some(n) => Ok(n),
                None => Self::shared_keyed(site, key, *d),
            })
            .collect()
    }

    /// Builds the nights from `from` to `to` (inclusive) into the shared
    /// cache, in parallel, before work that will ask for them from several
    /// threads at once (the targets of a budget or a plan). Without it the
    /// first target to ask builds the nights while the other threads wait
    /// on the night it is building instead of building the next ones: at
    /// the start of `rung plan` one core stood idle for most of a second.
    /// Only a warm-up: the nights are the ones [`Night::shared`] would
    /// build (the same bits), a range longer than the cache holds is left
    /// to be built as asked, and a night that cannot be built is left for
    /// the caller that asks for it to report.
    pub fn warm_range(site: &Site, from: NaiveDate, to: NaiveDate) {
        let nights = (to - from).num_days() + 1;
        if nights > 0 && nights as usize <= NIGHT_CACHE_MAX {
            // The error, if any, is the asker's to report (see above).
            let _ = Self::shared_range(site, from, to);
        }
    }

    fn shared_keyed(site: &Site, key: u64, date: NaiveDate) -> Result<Arc<Night>> {
        let slot: BuildSlot = {
            let mut c = night_cache();
            match c.slots.get(&(key, date)) {
                // Built: one count on the night, nothing else to lock.
                Some(CacheEntry::Built(n)) => return Ok(n.clone()),
                Some(CacheEntry::Building(s)) => s.clone(),
                None => {
                    if c.slots.len() >= NIGHT_CACHE_MAX {
                        for _ in 0..NIGHT_CACHE_MAX / 4 {
                            if let Some(k) = c.order.pop_front() {
                                c.slots.remove(&k);
                            }
                        }
                    }
                    let s = BuildSlot::default();
                    c.slots.insert((key, date), CacheEntry::Building(s.clone()));
                    c.order.push_back((key, date));
                    s
                }
            }
        };
        // Build (once) under the night's own lock; other nights go on meanwhile.
        let mut n = slot.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(night) = n.as_ref() {
            return Ok(night.clone());
        }
        let night = Arc::new(Night::new(site, date)?);
        *n = Some(night.clone());
        // The entry becomes the night itself, unless the night was dropped
        // from the cache (and perhaps asked and begun again) meanwhile.
        let mut c = night_cache();
        if let Some(e) = c.slots.get_mut(&(key, date))
            && matches!(e, CacheEntry::Building(s) if Arc::ptr_eq(s, &slot))
        {
            *e = CacheEntry::Built(night.clone());
        }
        Ok(night)
    }

    /// A night over an explicit span (used by tests and by the season engine).
    pub fn spanning(site: &Site, date: NaiveDate, start: Instant, end: Instant) -> Result<Self> {
        start.check_span()?;
        end.check_span()?;
        // The frame reaches half an hour past each end for the refinements, but
        // never outside rung's valid span (it extrapolates smoothly there).
        let lo = Instant::from_jd_utc(VALID_FROM_JD)?;
        let hi = Instant::from_jd_utc(VALID_TO_JD - 1e-6)?;
        let mut f0 = start.add_seconds(-1800.0);
        if f0 < lo {
            f0 = lo;
        }
        let mut f1 = end.add_seconds(1800.0);
        if f1 > hi {
            f1 = hi;
        }
        let frame = NightFrame::new(site, f0, f1)?;
        let times = grid(start, end, GRID_STEP_S);
        let contexts: Vec<Context> = times.iter().map(|t| frame.context(*t)).collect();
        let sun: Vec<Observed> = contexts.iter().map(|c| c.sun()).collect();
        let sky = SkyFrame::new(site, start, end, &frame);
        Ok(Night {
            sky,
            moon_table: OnceLock::new(),
            moon_grid: OnceLock::new(),
            date,
            site: site.clone(),
            start,
            end,
            sun_alt_deg: sun.iter().map(|o| o.alt_geom_rad.to_degrees()).collect(),
            frame,
            times,
            contexts,
            sun,
            dark_cache: DarkCache::default(),
        })
    }

    /// The Moon's table for this night, made on first use.
    fn moon_table(&self) -> &MoonTable {
        self.moon_table
            .get_or_init(|| MoonTable::new(self.start, self.end))
    }

    /// Context at any instant of the night.
    pub fn context(&self, t: Instant) -> Context {
        self.moon_table().attach(self.frame.context(t))
    }

    /// The context at grid instant `i` ([`Night::times`]), the Moon
    /// included: [`Night::context`] of that instant.
    pub fn grid_context(&self, i: usize) -> Context {
        self.moon_table().attach(self.contexts[i])
    }

    fn moon_grid(&self) -> &(Vec<Observed>, Vec<f64>) {
        self.moon_grid.get_or_init(|| {
            let moon: Vec<Observed> = (0..self.contexts.len())
                .map(|i| self.grid_context(i).moon())
                .collect();
            let alt = moon.iter().map(|o| o.alt_geom_rad.to_degrees()).collect();
            (moon, alt)
        })
    }

    /// The Moon on the grid ([`Night::times`]).
    pub fn moon(&self) -> &[Observed] {
        &self.moon_grid().0
    }

    /// Topocentric geometric altitude of the Moon's centre on the grid
    /// ([`Night::times`]), degrees.
    pub fn moon_alt_deg(&self) -> &[f64] {
        &self.moon_grid().1
    }

    /// The context at `t` without the Moon's table: the time scales, the
    /// Sun, the Earth and targets' places are those of [`Night::context`]
    /// to the bit; its Moon, if asked, is SOFA `moon98`'s own. For callers
    /// that need no Moon (barycentric times, the Sun's altitude), on nights
    /// whose Moon is never looked at.
    pub fn context_without_moon(&self, t: Instant) -> Context {
        self.frame.context(t)
    }

    /// The Earth's barycentric position at `t`, au: that of
    /// [`Self::context`]`(t)`, without building the context.
    pub fn earth_bary_au(&self, t: Instant) -> [f64; 3] {
        self.frame.earth_bary_au(t)
    }

    /// Geometric altitude of the Sun's centre, degrees.
    pub fn sun_alt_at(&self, t: Instant) -> f64 {
        self.context_without_moon(t).sun().alt_geom_rad.to_degrees()
    }

    fn sun_crossings(&self, thr_deg: f64) -> Vec<Crossing> {
        let vs: Vec<f64> = self.sun_alt_deg.iter().map(|a| a - thr_deg).collect();
        let mut f = |t: Instant| self.sun_alt_at(t) - thr_deg;
        crossings_on_grid(&mut f, &self.times, &vs, EVENT_TOL_S)
    }

    /// The falling (dusk) and rising (dawn) crossings of the Sun through `thr_deg`,
    /// each `None` with a reason when it does not happen this night. `names` are
    /// the two events' names for the reasons (e.g. "sunset", "sunrise").
    pub fn sun_pair(&self, thr_deg: f64, names: (&str, &str)) -> (Event, Event) {
        let c = self.sun_crossings(thr_deg);
        let fall = c.iter().find(|c| !c.rising).map(|c| c.t);
        let rise = c
            .iter()
            .rev()
            .find(|c| c.rising && fall.is_none_or(|f| c.t > f))
            .map(|c| c.t);
        let above_all = self.sun_alt_deg.iter().all(|a| *a >= thr_deg);
        let below_all = self.sun_alt_deg.iter().all(|a| *a < thr_deg);
        let thr = fmt_alt(thr_deg);
        let why = |which: &str| {
            if above_all {
                format!("no {which}: the Sun's centre stays above {thr} all night")
            } else if below_all {
                format!("no {which}: the Sun's centre stays below {thr} from noon to noon")
            } else {
                format!("no {which}: the Sun does not cross {thr} that way between the local noons")
            }
        };
        (
            fall.map(Event::at)
                .unwrap_or_else(|| Event::none(why(names.0))),
            rise.map(Event::at)
                .unwrap_or_else(|| Event::none(why(names.1))),
        )
    }

    /// Sunset, sunrise and the three twilights, plus moonrise/set.
    pub fn events(&self) -> NightEvents {
        let (sunset, sunrise) = self.sun_pair(SUN_RISE_SET_DEG, ("sunset", "sunrise"));
        let (civil_dusk, civil_dawn) = self.sun_pair(CIVIL_DEG, ("civil dusk", "civil dawn"));
        let (nautical_dusk, nautical_dawn) =
            self.sun_pair(NAUTICAL_DEG, ("nautical dusk", "nautical dawn"));
        let (astronomical_dusk, astronomical_dawn) =
            self.sun_pair(ASTRONOMICAL_DEG, ("astronomical dusk", "astronomical dawn"));
        let (moonrise, moonset) = self.moon_events();
        let mid = self
            .start
            .add_seconds(self.end.seconds_since(&self.start) / 2.0);
        let c = self.context(mid);
        NightEvents {
            sunset,
            sunrise,
            civil_dusk,
            civil_dawn,
            nautical_dusk,
            nautical_dawn,
            astronomical_dusk,
            astronomical_dawn,
            moonrise,
            moonset,
            moon_illumination: c.moon_illumination(),
            moon_waxing: c.moon_waxing(),
            local_midnight: mid,
        }
    }

    /// First moonrise and first moonset between the local noons.
    pub fn moon_events(&self) -> (Event, Event) {
        let vs: Vec<f64> = self
            .moon_alt_deg()
            .iter()
            .enumerate()
            .map(|(i, a)| a - moon_rise_set_topo_deg(&self.grid_context(i)))
            .collect();
        let mut f = |t: Instant| {
            let c = self.context(t);
            c.moon().alt_geom_rad.to_degrees() - moon_rise_set_topo_deg(&c)
        };
        let cs = crossings_on_grid(&mut f, &self.times, &vs, EVENT_TOL_S);
        let rise = cs.iter().find(|c| c.rising).map(|c| Event::at(c.t));
        let set = cs.iter().find(|c| !c.rising).map(|c| Event::at(c.t));
        let up = vs.iter().all(|v| *v >= 0.0);
        let reason = |w: &str| {
            if up {
                format!("the Moon is up all night: no moon{w}")
            } else if vs.iter().all(|v| *v < 0.0) {
                format!("the Moon is down all night: no moon{w}")
            } else {
                format!("no moon{w} between the local noons")
            }
        };
        (
            rise.unwrap_or_else(|| Event::none(reason("rise"))),
            set.unwrap_or_else(|| Event::none(reason("set"))),
        )
    }

    /// Intervals of the night when the Sun's centre is below `sun_alt_deg`
    /// (found once per limit and kept with the night).
    pub fn dark_intervals(&self, sun_alt_deg: f64) -> Vec<(Instant, Instant)> {
        self.dark_shared(sun_alt_deg).to_vec()
    }

    /// [`Night::dark_intervals`] as the night keeps them (no copy: the
    /// series asks them of every night for every target).
    pub fn dark_shared(&self, sun_alt_deg: f64) -> Arc<[(Instant, Instant)]> {
        if let Ok(c) = self.dark_cache.lock()
            && let Some((_, iv)) = c.iter().find(|(s, _)| *s == sun_alt_deg)
        {
            return iv.clone();
        }
        let vs: Vec<f64> = self.sun_alt_deg.iter().map(|a| sun_alt_deg - a).collect();
        let mut f = |t: Instant| sun_alt_deg - self.sun_alt_at(t);
        let iv: Arc<[(Instant, Instant)]> =
            positive_intervals(&mut f, &self.times, &vs, EVENT_TOL_S).into();
        if let Ok(mut c) = self.dark_cache.lock()
            && c.len() < 16
        {
            c.push((sun_alt_deg, iv.clone()));
        }
        iv
    }

    /// Rise, transit, set and the observable window of a target this night:
    /// the row of the visibility table (`astro::visibility`), every event
    /// refined to a millisecond on the exact observed place.
    pub fn target(&self, place: &CatalogPlace, limits: &Limits) -> TargetNight {
        self.target_on(&self.sky.track(place), limits)
    }

    /// [`Night::target`] for a target whose track through this night is
    /// already built ([`Night::track`]).
    pub fn target_on(&self, track: &Track, limits: &Limits) -> TargetNight {
        track.target_night(&self.site, &self.dark_intervals(limits.sun_alt_deg), limits)
    }

    /// The same without rise and set (each `None` with the reason "not
    /// computed"): windows, transit and the highest altitude in the dark, what
    /// the distance methods, the budget and the scheduler need.
    pub fn windows(&self, place: &CatalogPlace, limits: &Limits) -> TargetNight {
        self.windows_on(&self.sky.track(place), limits)
    }

    /// [`Night::windows`] for a target whose track through this night is
    /// already built ([`Night::track`]).
    pub fn windows_on(&self, track: &Track, limits: &Limits) -> TargetNight {
        track.windows_night(&self.site, &self.dark_intervals(limits.sun_alt_deg), limits)
    }

    /// A target's [`Track`] through this night: its exact observed place at
    /// any instant and its closed-form first guesses.
    pub fn track(&self, place: &CatalogPlace) -> Track<'_> {
        self.sky.track(place)
    }
}

/// The Sun and Moon events of one night.
#[derive(Debug, Clone, PartialEq)]
pub struct NightEvents {
    /// Sun's centre through −0°50′ going down.
    pub sunset: Event,
    /// Sun's centre through −0°50′ going up.
    pub sunrise: Event,
    /// Sun through −6° going down.
    pub civil_dusk: Event,
    /// Sun through −6° going up.
    pub civil_dawn: Event,
    /// Sun through −12° going down.
    pub nautical_dusk: Event,
    /// Sun through −12° going up.
    pub nautical_dawn: Event,
    /// Sun through −18° going down.
    pub astronomical_dusk: Event,
    /// Sun through −18° going up.
    pub astronomical_dawn: Event,
    /// First moonrise between the local noons.
    pub moonrise: Event,
    /// First moonset between the local noons.
    pub moonset: Event,
    /// Illuminated fraction of the Moon at the middle of the night (local midnight).
    pub moon_illumination: f64,
    /// Whether the Moon is waxing then.
    pub moon_waxing: bool,
    /// The middle of the noon-to-noon span (local midnight, to within DST shifts).
    pub local_midnight: Instant,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn moon_table_matches_moon98() {
        // The interpolated Moon against SOFA moon98 at odd instants through
        // two nights (new and full Moon): within 1 m (0.0005″ at the Moon).
        let site = crate::io::sites::resolve("pampa-lucero").unwrap();
        for day in ["2026-12-09", "2026-12-24"] {
            let night = Night::new(&site, day.parse().unwrap()).unwrap();
            let span = night.end.seconds_since(&night.start);
            for k in 0..=50 {
                let t = night.start.add_seconds(span * k as f64 / 50.0 + 17.3);
                let got = night.context(t).moon_geo_pv();
                let (a, b) = t.tt();
                let want = sofars::eph::moon98(a, b);
                let d = (0..3)
                    .map(|i| (got[0][i] - want[0][i]).powi(2))
                    .sum::<f64>()
                    .sqrt();
                assert!(
                    d * sofars::consts::DAU < 1.0,
                    "{day} +{k}: {} m",
                    d * sofars::consts::DAU
                );
            }
        }
    }

    #[test]
    fn frame_tdb_matches_dtdb() {
        // TDB − TT carried by the night's contexts against SOFA dtdb with the
        // site's terms: within 5 µs.
        let site = crate::io::sites::resolve("sierra-alcaravan").unwrap();
        let night = Night::new(&site, "2027-03-01".parse().unwrap()).unwrap();
        let (u, v) = site.spin_axis_uv_km();
        for k in 0..=24 {
            let t = night.start.add_seconds(k as f64 * 3600.0);
            let c = night.context(t);
            let (t1, t2) = t.tdb(site.lon_rad(), u, v);
            let (a, b) = c.tt();
            let want = ((t1 - a) + (t2 - b)) * crate::astro::time::DAY_S;
            let got = c.tdb_minus_tt_s().unwrap();
            assert!((got - want).abs() < 5e-6, "{k}: {got} vs {want}");
        }
    }

    /// The grid method the table replaced: the night's contexts every 60 s,
    /// each sign change refined to 1 ms on `Night::context`.
    fn brute_windows(night: &Night, place: &CatalogPlace, limits: &Limits) -> Vec<(f64, f64)> {
        let ts = grid(night.start, night.end, 60.0);
        let margin = |t: Instant| {
            let o = night.context(t).observe(place);
            let floor = limits
                .min_alt_deg
                .max(night.site.horizon_alt_deg(o.az_rad.to_degrees()));
            o.alt_rad.to_degrees() - floor
        };
        let vs: Vec<f64> = ts.iter().map(|t| margin(*t)).collect();
        let mut f = |t: Instant| margin(t);
        let above = positive_intervals(&mut f, &ts, &vs, 0.001);
        intersect_intervals(&above, &night.dark_intervals(limits.sun_alt_deg))
            .iter()
            .map(|(a, b)| (night.sky.offset(*a), night.sky.offset(*b)))
            .collect()
    }

    #[test]
    fn table_rows_match_a_fine_grid_on_the_full_chain() {
        // Against the night's own SOFA contexts on a 60 s grid (an independent
        // path: no closed form, no interpolated CIRS place), at a site with a
        // horizon mask and one without, targets from pole to pole.
        let sites = crate::io::sites::catalogue().unwrap();
        let limits = [
            Limits::new(30.0, -12.0).unwrap(),
            Limits::new(0.0, -18.0).unwrap(),
        ];
        let mut worst: f64 = 0.0;
        for site in sites.iter().take(2) {
            for day in ["2026-03-20", "2026-12-01"] {
                let night = Night::new(site, day.parse::<NaiveDate>().unwrap()).unwrap();
                for i in 0..24 {
                    let place =
                        CatalogPlace::fixed_deg(i as f64 * 15.0 + 3.0, -88.0 + i as f64 * 7.6);
                    for lim in &limits {
                        let got = night.target(&place, lim);
                        let want = brute_windows(&night, &place, lim);
                        let got_s: Vec<(f64, f64)> = got
                            .windows
                            .iter()
                            .map(|(a, b)| (night.sky.offset(*a), night.sky.offset(*b)))
                            .collect();
                        assert_eq!(
                            got_s.len(),
                            want.len(),
                            "{} {day} #{i}: {got_s:?} vs {want:?}",
                            site.name
                        );
                        for (g, w) in got_s.iter().zip(&want) {
                            worst = worst.max((g.0 - w.0).abs()).max((g.1 - w.1).abs());
                        }
                        // The highest altitude in the dark is at least every
                        // grid point's, and it is the altitude at its time.
                        let best_grid = grid(night.start, night.end, 60.0)
                            .iter()
                            .filter(|t| night.sun_alt_at(**t) < lim.sun_alt_deg)
                            .map(|t| night.context(*t).observe(&place).alt_rad.to_degrees())
                            .fold(f64::NEG_INFINITY, f64::max);
                        if let (Some(m), Some(t)) = (got.max_altitude_deg, got.max_altitude_time) {
                            assert!(m >= best_grid - 1e-6, "{m} vs {best_grid}");
                            let there = night.context(t).observe(&place).alt_rad.to_degrees();
                            assert!((m - there).abs() < 1e-5, "{m} vs {there}");
                            assert!(night.sun_alt_at(t) < lim.sun_alt_deg + 1e-4);
                        }
                        if let Some(t) = got.transit.t {
                            // 0.01″ of the night frame's interpolation on the
                            // sky is 0.01″/cos δ of hour angle.
                            let o = night.context(t).observe(&place);
                            let on_sky = o.ha_rad.abs() * o.dec_rad.cos();
                            assert!(
                                on_sky < 0.02 / 206_265.0,
                                "#{i}: transit off by {on_sky} rad"
                            );
                        }
                    }
                }
            }
        }
        assert!(worst < 0.01, "window edges differ by {worst} s");
    }
}
