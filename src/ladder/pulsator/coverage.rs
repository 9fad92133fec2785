//! Phase coverage from one site: the phases each night's windows reach and
//! a visit plan that covers the phase bins on the fewest nights.

use super::{Ephemeris, MAX_RANGE_NIGHTS, Star};
use crate::astro::bary::{Bjd, bjd_tdb_ctx};
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::time::{DAY_S, Instant};
use crate::error::{Result, RungError};
use chrono::NaiveDate;
use std::collections::BTreeMap;

/// The phases one observable window of one night covers.
#[derive(Debug, Clone, PartialEq)]
pub struct PhaseWindow {
    /// The local date whose evening starts the night.
    pub night: NaiveDate,
    /// Window start (UTC instant).
    pub start: Instant,
    /// Window end.
    pub end: Instant,
    /// BJD_TDB at the start.
    pub bjd_start: Bjd,
    /// BJD_TDB at the end.
    pub bjd_end: Bjd,
    /// Phase at the start, [0, 1).
    pub phase_start: f64,
    /// Phase at the end, [0, 1) (smaller than the start when the window wraps through maximum).
    pub phase_end: f64,
    /// Cycles the window spans ((end − start)/P); ≥ 1 means every phase is reachable.
    pub span_cycles: f64,
}

/// For each night from `from` to `to` (inclusive), the windows when the
/// target is observable under `limits`, with the phases they cover.
///
/// Windows come from the visibility table (`Night::windows`: observed
/// altitude above the limit and the horizon mask, Sun below its limit; edges
/// to 1 ms), the nights in parallel. BJD_TDB at each edge
/// from [`bjd_tdb_ctx`]. Nights with no window are listed in the second vector.
pub fn phase_windows(
    site: &Site,
    star: &Star,
    from: NaiveDate,
    to: NaiveDate,
    limits: &Limits,
) -> Result<(Vec<PhaseWindow>, Vec<NaiveDate>)> {
    let n = (to - from).num_days();
    if n < 0 {
        return Err(RungError::invalid(
            "date range",
            format!("the last night {to} is before the first {from}"),
        ));
    }
    if n >= MAX_RANGE_NIGHTS {
        return Err(RungError::invalid(
            "date range",
            format!("{} nights is more than {MAX_RANGE_NIGHTS}", n + 1),
        ));
    }
    // The nights in parallel (each built once, `Night::shared_range`), each
    // night's windows from the visibility table, then in date order.
    use rayon::prelude::*;
    let nights = Night::shared_range(site, from, to)?;
    let per_night: Vec<Vec<PhaseWindow>> = nights
        .par_iter()
        .map(|night| {
            let tn = night.windows(&star.place, limits);
            tn.windows
                .iter()
                .map(|(a, b)| {
                    let ba = bjd_tdb_ctx(site, &night.context_without_moon(*a), &star.place);
                    let bb = bjd_tdb_ctx(site, &night.context_without_moon(*b), &star.place);
                    let e = &star.ephemeris;
                    PhaseWindow {
                        night: night.date,
                        start: *a,
                        end: *b,
                        bjd_start: ba,
                        bjd_end: bb,
                        phase_start: e.phase(&ba),
                        phase_end: e.phase(&bb),
                        span_cycles: (e.cycles(&bb) - e.cycles(&ba)),
                    }
                })
                .collect()
        })
        .collect();
    let mut out = Vec::new();
    let mut empty = Vec::new();
    for (night, ws) in nights.iter().zip(per_night) {
        if ws.is_empty() {
            empty.push(night.date);
        }
        out.extend(ws);
    }
    Ok((out, empty))
}

/// One planned visit of a coverage plan.
#[derive(Debug, Clone, PartialEq)]
pub struct Visit {
    /// The night (local date of its evening).
    pub night: NaiveDate,
    /// Mid-visit instant (UTC).
    pub time: Instant,
    /// BJD_TDB at mid-visit.
    pub bjd: Bjd,
    /// Phase at mid-visit.
    pub phase: f64,
    /// Phase bin, 0-based: bin b covers [b/N, (b+1)/N).
    pub bin: usize,
}

/// A plan of visits that covers phase bins.
#[derive(Debug, Clone, PartialEq)]
pub struct CoveragePlan {
    /// Number of bins N.
    pub bins: usize,
    /// Visits, in time order, one per covered bin.
    pub visits: Vec<Visit>,
    /// Bins covered.
    pub bins_covered: usize,
    /// Bins no night of the range reaches.
    pub missing_bins: Vec<usize>,
    /// The nights the plan uses, in date order.
    pub nights: Vec<NaiveDate>,
}

impl CoveragePlan {
    /// Nights the plan uses.
    pub fn nights_needed(&self) -> usize {
        self.nights.len()
    }
}

/// Bin → (mid instant, dwell seconds) in one night.
type BinReach = BTreeMap<usize, (Instant, f64)>;

/// Where in one night each bin can be visited.
fn night_bins(windows: &[&PhaseWindow], e: &Ephemeris, bins: usize, min_dwell_s: f64) -> BinReach {
    let mut best: BinReach = BTreeMap::new();
    let bin_len_s = e.period_d * DAY_S / bins as f64;
    let need_s = min_dwell_s.min(bin_len_s);
    for w in windows {
        let c0 = e.cycles(&w.bjd_start);
        let c1 = e.cycles(&w.bjd_end);
        let dur_s = w.end.seconds_since(&w.start);
        if c1 <= c0 || dur_s <= 0.0 {
            continue;
        }
        // BJD is linear in UTC across a night to far better than a second
        // (the Rømer delay changes by < 0.2 s per hour, its curvature by µs).
        let s_per_cycle = dur_s / (c1 - c0);
        let first = (c0 * bins as f64).floor() as i64;
        let last = (c1 * bins as f64).floor() as i64;
        for j in first..=last {
            let lo = (j as f64 / bins as f64).max(c0);
            let hi = ((j + 1) as f64 / bins as f64).min(c1);
            if hi <= lo {
                continue;
            }
            let dwell_s = (hi - lo) * s_per_cycle;
            if dwell_s + 1e-6 < need_s {
                continue;
            }
            let bin = j.rem_euclid(bins as i64) as usize;
            let mid = w.start.add_seconds(((lo + hi) / 2.0 - c0) * s_per_cycle);
            if best.get(&bin).is_none_or(|(_, d)| dwell_s > *d) {
                best.insert(bin, (mid, dwell_s));
            }
        }
    }
    best
}

/// A visit plan covering `bins` phase bins with the fewest nights, one visit
/// per bin (so the fewest visits: one per reachable bin).
///
/// Each night reaches the bins its windows cross for at least `min_dwell_s`
/// (or the whole bin when a bin is shorter). Choosing the fewest nights is a
/// set-cover problem; this is the greedy rule (take the night that reaches
/// most uncovered bins, earlier night on ties, until no night adds a bin),
/// which is within a factor H(N) ≈ ln N + 0.58 of the optimum (Chvátal 1979,
/// Math. Oper. Res. 4, 233; quoted from memory) and optimal in the common
/// cases of nights that each reach a contiguous arc. A visit sits at the middle
/// of the longest stretch of its bin in its night.
pub fn plan_coverage(
    windows: &[PhaseWindow],
    e: &Ephemeris,
    bins: usize,
    min_dwell_s: f64,
) -> Result<CoveragePlan> {
    if !(1..=10_000).contains(&bins) {
        return Err(RungError::invalid(
            "bins",
            format!("{bins} is not within 1..10000"),
        ));
    }
    let mut by_night: BTreeMap<NaiveDate, Vec<&PhaseWindow>> = BTreeMap::new();
    for w in windows {
        by_night.entry(w.night).or_default().push(w);
    }
    let reach: Vec<(NaiveDate, BinReach)> = by_night
        .iter()
        .map(|(d, ws)| (*d, night_bins(ws, e, bins, min_dwell_s)))
        .collect();
    let mut covered = vec![false; bins];
    let mut visits = Vec::new();
    let mut nights = Vec::new();
    loop {
        let mut pick: Option<(usize, usize)> = None; // (index, gain)
        for (i, (_, r)) in reach.iter().enumerate() {
            let gain = r.keys().filter(|b| !covered[**b]).count();
            if gain > 0 && pick.is_none_or(|(_, g)| gain > g) {
                pick = Some((i, gain));
            }
        }
        let Some((i, _)) = pick else { break };
        let (date, r) = &reach[i];
        nights.push(*date);
        for (b, (t, _)) in r {
            if !covered[*b] {
                covered[*b] = true;
                let ctx_free_bjd = interpolate_bjd(by_night[date].as_slice(), *t);
                visits.push(Visit {
                    night: *date,
                    time: *t,
                    bjd: ctx_free_bjd,
                    phase: e.phase(&ctx_free_bjd),
                    bin: *b,
                });
            }
        }
    }
    visits.sort_by(|a, b| {
        a.time
            .partial_cmp(&b.time)
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    nights.sort();
    let missing_bins: Vec<usize> = (0..bins).filter(|b| !covered[*b]).collect();
    Ok(CoveragePlan {
        bins,
        bins_covered: bins - missing_bins.len(),
        missing_bins,
        visits,
        nights,
    })
}

/// BJD at an instant inside one of the windows, linear between its edges.
fn interpolate_bjd(ws: &[&PhaseWindow], t: Instant) -> Bjd {
    for w in ws {
        let span = w.end.seconds_since(&w.start);
        let x = t.seconds_since(&w.start);
        if span > 0.0 && (-1.0..=span + 1.0).contains(&x) {
            let db = (w.bjd_end.jd1 - w.bjd_start.jd1) + (w.bjd_end.jd2 - w.bjd_start.jd2);
            return Bjd {
                jd1: w.bjd_start.jd1,
                jd2: w.bjd_start.jd2 + db * x / span,
            };
        }
    }
    let w = ws[0];
    Bjd {
        jd1: w.bjd_start.jd1,
        jd2: w.bjd_start.jd2 + t.seconds_since(&w.start) / DAY_S,
    }
}
