//! Finding a period and keeping an ephemeris: a cadence that recovers an
//! unknown period from a range without aliasing, and the ephemeris updated
//! from the observer's own times of maximum by a linear O−C fit
//! (docs/science.md, Pulsating stars).
//!
//! - Cadence: observations geometrically spaced in time, t_k = T (x^k − 1) /
//!   (x^(N−1) − 1), whose spread of spacings leaves no frequency sampled
//!   coherently by all of them, so the spectral window has no strong alias
//!   (Saunders, Naylor & Allan 2006, A&A 455, 757; they show the base x is
//!   critical and that the observations may be reordered as long as the
//!   spacings keep their spread). rung places each ideal instant at the
//!   nearest observable moment from the site and chooses x by the tallest
//!   sidelobe of the spectral window of the times it can actually take.
//! - Period precision of a sinusoid of semi-amplitude A fitted to N points of
//!   error σ over a span T: σ_f = √6 σ / (π √N A T), σ_P = P² σ_f
//!   (Montgomery & O'Donoghue 1999, Delta Scuti Star Newsletter 13, 28;
//!   quoted from memory).
//! - Ephemeris: T_max(n) = E + P n by weighted least squares over the cycle
//!   numbers n the current ephemeris assigns to the observed maxima.

use super::{Ephemeris, MAG_PER_INV_SNR};
use crate::astro::frames::CatalogPlace;
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::time::{DAY_S, Instant};
use crate::error::{Result, RungError};
use chrono::NaiveDate;
use serde::Serialize;
use std::f64::consts::PI;

/// The geometric series of `n` offsets over `span_d` days with base `x`:
/// t_k = span (x^k − 1)/(x^(n−1) − 1), k = 0..n−1 (evenly spaced for x = 1).
/// Source: Saunders, Naylor & Allan (2006), A&A 455, 757 (quoted from memory).
pub fn geometric_offsets(n: usize, span_d: f64, x: f64) -> Vec<f64> {
    if n < 2 {
        return vec![0.0; n];
    }
    let last = (n - 1) as f64;
    (0..n)
        .map(|k| {
            if (x - 1.0).abs() < 1e-12 {
                span_d * k as f64 / last
            } else {
                span_d * (x.powi(k as i32) - 1.0) / (x.powf(last) - 1.0)
            }
        })
        .collect()
}

/// The normalised spectral window |Σ e^{2πiνt}| / N at frequency offset
/// `nu_cpd` (cycles per day) of the times `t_d` (days): 1 at ν = 0; a tall
/// value elsewhere is an alias a period search can fall into (Deeming 1975,
/// Ap&SS 36, 137; quoted from memory).
pub fn spectral_window(t_d: &[f64], nu_cpd: f64) -> f64 {
    let (mut c, mut s) = (0.0, 0.0);
    for t in t_d {
        let a = 2.0 * PI * nu_cpd * t;
        c += a.cos();
        s += a.sin();
    }
    (c * c + s * s).sqrt() / t_d.len().max(1) as f64
}

/// The tallest sidelobe of the spectral window of `t_d` between the main
/// lobe (offsets beyond 1.5/T) and `nu_max_cpd`, and where it is: the
/// strongest alias of any frequency up to `nu_max_cpd`.
pub fn tallest_sidelobe(t_d: &[f64], nu_max_cpd: f64) -> (f64, f64) {
    let span = t_d.iter().cloned().fold(f64::NEG_INFINITY, f64::max)
        - t_d.iter().cloned().fold(f64::INFINITY, f64::min);
    if span.is_nan() || span <= 0.0 {
        return (1.0, 0.0);
    }
    let step = 1.0 / (8.0 * span);
    let mut nu = 1.5 / span;
    let mut best = (0.0, 0.0);
    while nu <= nu_max_cpd {
        let w = spectral_window(t_d, nu);
        if w > best.0 {
            best = (w, nu);
        }
        nu += step;
    }
    best
}

/// The 1σ period error a sinusoid fit reaches, days:
/// σ_P = P² √6 σ / (π √N A T) with A the semi-amplitude and σ the per-point
/// error (mag), T the span (days). Montgomery & O'Donoghue (1999), quoted
/// from memory.
pub fn period_sigma_d(
    period_d: f64,
    n: usize,
    sigma_mag: f64,
    semi_amplitude_mag: f64,
    span_d: f64,
) -> f64 {
    period_d * period_d * 6f64.sqrt() * sigma_mag
        / (PI * (n as f64).sqrt() * semi_amplitude_mag * span_d)
}

/// A cadence to discover a period from a range.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DiscoveryPlan {
    /// Shortest period sought, days.
    pub period_min_d: f64,
    /// Longest period sought, days.
    pub period_max_d: f64,
    /// The base x of the geometric series chosen.
    pub base: f64,
    /// The planned instants (UTC), in time order.
    #[serde(skip)]
    pub times: Vec<Instant>,
    /// The same as ISO strings.
    pub times_utc: Vec<String>,
    /// BJD_TDB of each instant.
    pub bjd_tdb: Vec<f64>,
    /// Days from the first to the last observation.
    pub span_d: f64,
    /// Tallest sidelobe of the spectral window of these times (0–1).
    pub max_sidelobe: f64,
    /// Its frequency offset, cycles per day.
    pub max_sidelobe_cpd: f64,
    /// The same for evenly spaced nightly visits over the same nights, for comparison.
    pub nightly_max_sidelobe: f64,
    /// Whether simulated stars across the range are all recovered from
    /// these times and the true peak stands above every alias
    /// ([`recovery_check`], [`alias_peaks`]).
    pub alias_free: bool,
    /// The test star whose periodogram is shown: the geometric middle of the
    /// range, days.
    pub test_period_d: f64,
    /// The tallest peaks of its periodogram over the planned times
    /// (noiseless sinusoid, [`periodogram`]): the true peak and the aliases
    /// the cadence leaves, tallest first.
    pub alias_peaks: Vec<AliasPeak>,
    /// That periodogram on a coarse grid for plotting: frequencies, cycles/day.
    pub periodogram_cpd: Vec<f64>,
    /// And its power (0–1), the largest value in each cell of the grid.
    pub periodogram_power: Vec<f64>,
    /// Simulated stars recovered, of [`Self::trials`].
    pub recovered: usize,
    /// Simulated stars tried (periods evenly in log P over the range).
    pub trials: usize,
    /// How the expected period error falls as the planned observations
    /// accumulate.
    pub progress: Vec<DiscoveryStep>,
    /// Expected period error at the shortest and the longest period, days.
    pub period_err_at_min_d: f64,
    /// At the longest period, days.
    pub period_err_at_max_d: f64,
    /// Per-point error assumed, mag.
    pub sigma_point_mag: f64,
    /// Semi-amplitude assumed, mag.
    pub semi_amplitude_mag: f64,
    /// Notes (what was assumed, what falls short).
    pub notes: Vec<String>,
}

/// One peak of a periodogram.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AliasPeak {
    /// Frequency, cycles per day.
    pub frequency_cpd: f64,
    /// Period, days.
    pub period_d: f64,
    /// Power (standard normalisation, 0–1).
    pub power: f64,
    /// Power over the true peak's.
    pub relative: f64,
    /// Whether this is the true period's peak (within the main lobe, 1/T).
    pub true_peak: bool,
}

/// The expected period error after the first `epochs` planned observations.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DiscoveryStep {
    /// Observations so far.
    pub epochs: usize,
    /// Days from the first to the last of them.
    pub span_d: f64,
    /// Expected period error at the shortest period, days.
    pub period_err_at_min_d: f64,
    /// At the longest period, days.
    pub period_err_at_max_d: f64,
}

/// The generalised Lomb–Scargle periodogram (a floating-mean sinusoid fitted
/// by weighted least squares at each frequency; Zechmeister & Kürster 2009,
/// A&A 496, 577) in the standard normalisation, power = 1 − χ²(f)/χ²₀ with
/// χ²₀ that of the weighted mean alone: the same quantity as astropy's
/// `LombScargle(t, y, dy).power(f)` (checked against it,
/// tests/reference/make_lombscargle_fixtures.py). Times in days,
/// frequencies in cycles per day; a frequency whose fit is singular gets 0.
pub fn periodogram(
    t_d: &[f64],
    mags: &[f64],
    sigmas: &[f64],
    freqs_cpd: &[f64],
) -> Result<Vec<f64>> {
    check_light_curve(t_d, mags, sigmas)?;
    let chi2_0 = chi2_const(mags, sigmas);
    Ok(freqs_cpd
        .iter()
        .map(|f| {
            if chi2_0 > 0.0 {
                (1.0 - sine_chi2(t_d, mags, sigmas, *f) / chi2_0).max(0.0)
            } else {
                0.0
            }
        })
        .collect())
}

fn check_light_curve(t_d: &[f64], mags: &[f64], sigmas: &[f64]) -> Result<()> {
    if t_d.len() != mags.len() || t_d.len() != sigmas.len() || t_d.len() < 4 {
        return Err(RungError::invalid(
            "light curve",
            "needs at least 4 points, times, magnitudes and errors alike",
        ));
    }
    if sigmas.iter().any(|s| !(s.is_finite() && *s > 0.0))
        || t_d.iter().chain(mags).any(|x| !x.is_finite())
    {
        return Err(RungError::invalid(
            "light curve",
            "times and magnitudes must be finite and every error positive",
        ));
    }
    Ok(())
}

/// χ² of the weighted mean alone.
fn chi2_const(mags: &[f64], sigmas: &[f64]) -> f64 {
    let w: f64 = sigmas.iter().map(|s| 1.0 / (s * s)).sum();
    let m: f64 = mags
        .iter()
        .zip(sigmas)
        .map(|(m, s)| m / (s * s))
        .sum::<f64>()
        / w;
    mags.iter()
        .zip(sigmas)
        .map(|(x, s)| ((x - m) / s).powi(2))
        .sum::<f64>()
}

/// The tallest local maxima of a periodogram of a noiseless sinusoid of
/// period `period_d` sampled at `t_d`, searched from `f_min` to `f_max`
/// cycles per day on a grid of 1/(10 T), each refined by golden-section
/// search: the true peak and the aliases the sampling creates, tallest
/// first, at most `count`.
pub fn alias_peaks(
    t_d: &[f64],
    period_d: f64,
    f_min: f64,
    f_max: f64,
    count: usize,
) -> Result<Vec<AliasPeak>> {
    let m: Vec<f64> = t_d
        .iter()
        .map(|t| (2.0 * PI * t / period_d).cos())
        .collect();
    let s = vec![1.0; t_d.len()];
    check_light_curve(t_d, &m, &s)?;
    let span = span_of(t_d).max(1e-6);
    // A grid of 1/(10 T), finer when the range is narrow (200 points at least).
    let step = (1.0 / (10.0 * span)).min((f_max - f_min) / 200.0);
    let grid: Vec<f64> = (0..)
        .map(|i| f_min + step * i as f64)
        .take_while(|f| *f <= f_max)
        .collect();
    let pw = periodogram(t_d, &m, &s, &grid)?;
    let mut peaks = Vec::new();
    for i in 0..pw.len() {
        let left = if i == 0 { f64::NEG_INFINITY } else { pw[i - 1] };
        let right = pw.get(i + 1).copied().unwrap_or(f64::NEG_INFINITY);
        if pw[i] >= left && pw[i] > right {
            let (f, p) = refine(
                |f| 1.0 - sine_chi2(t_d, &m, &s, f) / chi2_const(&m, &s),
                grid[i],
                step,
            );
            peaks.push((f.clamp(f_min, f_max), p));
        }
    }
    peaks.sort_by(|a, b| b.1.partial_cmp(&a.1).unwrap_or(std::cmp::Ordering::Equal));
    let f_true = 1.0 / period_d;
    let p_true = 1.0 - sine_chi2(t_d, &m, &s, f_true) / chi2_const(&m, &s);
    Ok(peaks
        .into_iter()
        .take(count)
        .map(|(f, p)| AliasPeak {
            frequency_cpd: f,
            period_d: 1.0 / f,
            power: p,
            relative: p / p_true,
            true_peak: (f - f_true).abs() < 1.0 / span,
        })
        .collect())
}

/// Golden-section search for the maximum of `g` within one `step` of `f0`.
fn refine(g: impl Fn(f64) -> f64, f0: f64, step: f64) -> (f64, f64) {
    let (mut a, mut b) = (f0 - step, f0 + step);
    let r = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..60 {
        let c = b - r * (b - a);
        let d = a + r * (b - a);
        if g(c) > g(d) {
            b = d;
        } else {
            a = c;
        }
    }
    let f = (a + b) / 2.0;
    (f, g(f))
}

fn span_of(t_d: &[f64]) -> f64 {
    t_d.iter().cloned().fold(f64::NEG_INFINITY, f64::max)
        - t_d.iter().cloned().fold(f64::INFINITY, f64::min)
}

/// The observable intervals of `place` from `site`, night by night from
/// `from` to `to`, as (start, end) instants in time order.
pub fn observable_intervals(
    site: &Site,
    place: &CatalogPlace,
    from: NaiveDate,
    to: NaiveDate,
    limits: &Limits,
) -> Result<Vec<(Instant, Instant)>> {
    let nights = Night::shared_range(site, from, to)?;
    let mut out = Vec::new();
    for n in nights {
        out.extend(n.windows(place, limits).windows.iter().cloned());
    }
    Ok(out)
}

/// Place the ideal offsets (days from the first usable instant) at the
/// nearest observable moments, at least `dwell_s` apart, in time order.
fn place_offsets(windows: &[(Instant, Instant)], offsets_d: &[f64], dwell_s: f64) -> Vec<Instant> {
    let Some(first) = windows.first().map(|w| w.0) else {
        return Vec::new();
    };
    // Seconds since the first instant of each window edge.
    let ws: Vec<(f64, f64)> = windows
        .iter()
        .map(|(a, b)| (a.seconds_since(&first), b.seconds_since(&first)))
        .filter(|(a, b)| b - a >= dwell_s)
        .collect();
    let mut taken: Vec<f64> = Vec::new();
    for o in offsets_d {
        let want = o * DAY_S;
        // Candidate: inside a window, or the nearest edge (leaving room for the visit).
        let mut best: Option<f64> = None;
        for (a, b) in &ws {
            let lo = a + dwell_s / 2.0;
            let hi = b - dwell_s / 2.0;
            let c = want.clamp(lo, hi);
            if best.is_none_or(|x| (c - want).abs() < (x - want).abs()) {
                best = Some(c);
            }
        }
        let Some(mut t) = best else { break };
        // Keep visits apart: move past the ones already taken.
        let mut guard = 0;
        while let Some(p) = taken.iter().find(|p| (t - **p).abs() < dwell_s) {
            let next = p + dwell_s;
            // Still inside a window? Else the next window's start.
            t = match ws
                .iter()
                .find(|(a, b)| next >= a + dwell_s / 2.0 && next <= b - dwell_s / 2.0)
            {
                Some(_) => next,
                None => match ws.iter().find(|(a, _)| a + dwell_s / 2.0 > next) {
                    Some((a, _)) => a + dwell_s / 2.0,
                    None => break,
                },
            };
            guard += 1;
            if guard > 10_000 {
                break;
            }
        }
        if taken.iter().all(|p| (t - p).abs() >= dwell_s - 1e-6) {
            taken.push(t);
        }
    }
    taken.sort_by(|a, b| a.partial_cmp(b).unwrap_or(std::cmp::Ordering::Equal));
    taken.into_iter().map(|s| first.add_seconds(s)).collect()
}

/// Inputs of a discovery cadence.
#[derive(Debug, Clone)]
pub struct DiscoveryInput<'a> {
    /// The site.
    pub site: &'a Site,
    /// The target's place.
    pub place: &'a CatalogPlace,
    /// First night.
    pub from: NaiveDate,
    /// Last night.
    pub to: NaiveDate,
    /// Window limits.
    pub limits: &'a Limits,
    /// Shortest period sought, days.
    pub period_min_d: f64,
    /// Longest period sought, days.
    pub period_max_d: f64,
    /// Number of observations.
    pub epochs: usize,
    /// Per-point magnitude error, mag.
    pub sigma_point_mag: f64,
    /// Semi-amplitude of the variation, mag.
    pub semi_amplitude_mag: f64,
    /// Seconds one visit takes.
    pub dwell_s: f64,
}

/// A cadence of `epochs` observations that recovers a period between
/// `period_min_d` and `period_max_d` without aliasing: the geometric series
/// of Saunders, Naylor & Allan (2006) over the nights from `from` to `to`,
/// each instant at the nearest observable moment, the base chosen (1.00 to
/// 1.60) by the tallest sidelobe of the spectral window of the times taken,
/// up to 1/P_min + 1 cycle per day (so that the daily alias of every period
/// sought is seen). Errors: a bad range, too few epochs, nothing observable.
pub fn plan_discovery(inp: &DiscoveryInput) -> Result<DiscoveryPlan> {
    let (pmin, pmax) = (inp.period_min_d, inp.period_max_d);
    crate::bounds::PERIOD_D.check_as("period_min_d", pmin)?;
    crate::bounds::PERIOD_D.check_as("period_max_d", pmax)?;
    if pmin >= pmax {
        return Err(RungError::invalid(
            "period range",
            format!("the shortest period {pmin} d must be below the longest {pmax} d"),
        ));
    }
    if !(6..=500).contains(&inp.epochs) {
        return Err(RungError::invalid(
            "epochs",
            format!("{} is not within 6..500 observations", inp.epochs),
        ));
    }
    let windows = observable_intervals(inp.site, inp.place, inp.from, inp.to, inp.limits)?;
    let (Some(first), Some(last)) = (windows.first(), windows.last()) else {
        return Err(RungError::invalid(
            "target",
            format!(
                "is not observable from {} between {} and {} under these limits",
                inp.site.name, inp.from, inp.to
            ),
        ));
    };
    let avail_d = last.1.seconds_since(&first.0) / DAY_S;
    let mut notes = Vec::new();
    if avail_d < 2.0 * pmax {
        notes.push(format!(
            "the nights give {avail_d:.1} d, less than two cycles of the longest period ({pmax} d): extend the range"
        ));
    }
    let nu_max = 1.0 / pmin + 1.0;
    let bjds = |ts: &[Instant]| -> Result<Vec<f64>> {
        ts.iter()
            .map(|t| Ok(crate::astro::bary::bjd_tdb(inp.site, *t, inp.place)?.jd()))
            .collect::<Result<Vec<f64>>>()
    };
    // The bases 1.00, 1.01, … 1.60 (as a running sum, as they always were),
    // each one's sidelobe on all cores (its spectral window up to nu_max is
    // most of the plan's work), then chosen in order: the same choice.
    let mut bases = Vec::new();
    let mut x = 1.0;
    while x <= 1.6 + 1e-9 {
        bases.push(x);
        x += 0.01;
    }
    let tried: Vec<Option<(f64, f64, Vec<Instant>)>> = {
        use rayon::prelude::*;
        bases
            .par_iter()
            .map(|&x| {
                let offs = geometric_offsets(inp.epochs, avail_d, x);
                let ts = place_offsets(&windows, &offs, inp.dwell_s);
                (ts.len() == inp.epochs).then(|| {
                    let rel: Vec<f64> = ts
                        .iter()
                        .map(|t| t.seconds_since(&first.0) / DAY_S)
                        .collect();
                    (tallest_sidelobe(&rel, nu_max).0, x, ts)
                })
            })
            .collect()
    };
    let mut best: Option<(f64, f64, Vec<Instant>)> = None; // (sidelobe, base, times)
    for (h, x, ts) in tried.into_iter().flatten() {
        if best.as_ref().is_none_or(|b| h < b.0 - 1e-9) {
            best = Some((h, x, ts));
        }
    }
    let Some((_, base, times)) = best else {
        return Err(RungError::invalid(
            "epochs",
            format!(
                "{} observations do not fit in the observable time from {} to {}: ask for fewer or a longer range",
                inp.epochs, inp.from, inp.to
            ),
        ));
    };
    let bjd = bjds(&times)?;
    let t0 = bjd[0];
    let rel: Vec<f64> = bjd.iter().map(|b| b - t0).collect();
    let (h, h_nu) = tallest_sidelobe(&rel, nu_max);
    let span_d = rel.last().copied().unwrap_or(0.0);
    // The comparison: one visit a night at the same clock time.
    let nightly: Vec<f64> = (0..inp.epochs)
        .map(|k| k as f64 * (span_d / (inp.epochs - 1) as f64).round().max(1.0))
        .collect();
    let (hn, _) = tallest_sidelobe(&nightly, nu_max);
    let s = |p: f64, n: usize, span: f64| {
        period_sigma_d(p, n, inp.sigma_point_mag, inp.semi_amplitude_mag, span)
    };
    let progress = (3..=inp.epochs)
        .map(|k| DiscoveryStep {
            epochs: k,
            span_d: rel[k - 1],
            period_err_at_min_d: s(pmin, k, rel[k - 1]),
            period_err_at_max_d: s(pmax, k, rel[k - 1]),
        })
        .collect();
    let test_period_d = (pmin * pmax).sqrt();
    let f_lo = 1.0 / pmax;
    let f_hi = 1.0 / pmin;
    let peaks = alias_peaks(&rel, test_period_d, f_lo, f_hi, 5)?;
    // The periodogram of the test star on a coarse grid: the largest power
    // in each of 120 cells, so that no peak narrower than a cell is lost.
    let cells = 120;
    // At least two samples per cell, however narrow the range.
    let fine = (1.0 / (10.0 * span_d.max(1e-6))).min((f_hi - f_lo) / (2.0 * cells as f64));
    let ones = vec![1.0; rel.len()];
    let m: Vec<f64> = rel
        .iter()
        .map(|t| (2.0 * PI * t / test_period_d).cos())
        .collect();
    let grid: Vec<f64> = (0..)
        .map(|i| f_lo + fine * i as f64)
        .take_while(|f| *f <= f_hi)
        .collect();
    let pw = periodogram(&rel, &m, &ones, &grid)?;
    let width = (f_hi - f_lo) / cells as f64;
    let mut periodogram_power = vec![0.0f64; cells];
    for (f, p) in grid.iter().zip(&pw) {
        let c = (((f - f_lo) / width) as usize).min(cells - 1);
        periodogram_power[c] = periodogram_power[c].max(*p);
    }
    let periodogram_cpd = (0..cells)
        .map(|c| f_lo + width * (c as f64 + 0.5))
        .collect();
    let mut plan = DiscoveryPlan {
        period_min_d: pmin,
        period_max_d: pmax,
        base,
        times_utc: times.iter().map(|t| t.iso()).collect(),
        times,
        bjd_tdb: bjd,
        span_d,
        max_sidelobe: h,
        max_sidelobe_cpd: h_nu,
        nightly_max_sidelobe: hn,
        alias_free: false,
        test_period_d,
        alias_peaks: peaks,
        periodogram_cpd,
        periodogram_power,
        recovered: 0,
        trials: 0,
        progress,
        period_err_at_min_d: s(pmin, inp.epochs, span_d),
        period_err_at_max_d: s(pmax, inp.epochs, span_d),
        sigma_point_mag: inp.sigma_point_mag,
        semi_amplitude_mag: inp.semi_amplitude_mag,
        notes,
    };
    let (ok, n, _) = recovery_check(&plan, RECOVERY_TRIALS);
    plan.recovered = ok;
    plan.trials = n;
    let top_is_true = plan.alias_peaks.first().is_some_and(|p| p.true_peak);
    plan.alias_free = ok == n && top_is_true;
    if let Some(a) = plan.alias_peaks.iter().find(|p| !p.true_peak) {
        plan.notes.push(format!(
            "tallest alias of a {:.3}-d star: {:.3} d ({:.3} cycles/day) at {:.0} % of the true peak",
            test_period_d,
            a.period_d,
            a.frequency_cpd,
            100.0 * a.relative
        ));
    }
    if !plan.alias_free {
        plan.notes.push(format!(
            "{ok} of {n} simulated stars recovered{}: add observations or nights",
            if top_is_true {
                ""
            } else {
                ", and an alias stands above the true peak"
            }
        ));
    }
    if h > 0.7 {
        plan.notes.push(format!(
            "the spectral window reaches {h:.2} at {h_nu:.3} cycles/day: from one site the daily alias cannot be removed, only lowered by spreading the visits through the night"
        ));
    }
    Ok(plan)
}

/// Simulated stars a discovery plan is checked with.
pub const RECOVERY_TRIALS: usize = 12;

/// The best frequency of a sinusoid fitted by weighted least squares to
/// magnitudes `mags` (errors `sigmas`) at times `t_d`, searched from
/// `f_min` to `f_max` cycles per day on a grid of 1/(10 T) and refined by
/// golden-section search around the best grid point: the generalised
/// Lomb–Scargle periodogram (Zechmeister & Kürster 2009, A&A 496, 577;
/// quoted from memory). Returns (frequency, χ² reduction of the best fit).
pub fn best_frequency(
    t_d: &[f64],
    mags: &[f64],
    sigmas: &[f64],
    f_min: f64,
    f_max: f64,
) -> Result<(f64, f64)> {
    check_light_curve(t_d, mags, sigmas)?;
    let c0 = chi2_const(mags, sigmas);
    let power = |f: f64| c0 - sine_chi2(t_d, mags, sigmas, f);
    let step = 1.0 / (10.0 * span_of(t_d).max(1e-6));
    let mut f = f_min;
    let mut best = (f_min, f64::NEG_INFINITY);
    while f <= f_max {
        let p = power(f);
        if p > best.1 {
            best = (f, p);
        }
        f += step;
    }
    Ok(refine(power, best.0, step))
}

/// χ² of the weighted least-squares fit m = c + a cos 2πft + b sin 2πft.
fn sine_chi2(t_d: &[f64], mags: &[f64], sigmas: &[f64], f: f64) -> f64 {
    // Each point's cosine and sine are worked out once, for the fit and for
    // its residuals (they used to be worked out again for the residuals:
    // the same values), on the stack for a light curve of up to STACK
    // points.
    const STACK: usize = 64;
    if t_d.len() <= STACK {
        let mut cs = [(0.0, 0.0); STACK];
        sine_chi2_with(t_d, mags, sigmas, f, &mut cs[..t_d.len()])
    } else {
        sine_chi2_with(t_d, mags, sigmas, f, &mut vec![(0.0, 0.0); t_d.len()])
    }
}

/// [`sine_chi2`] with room `cs` for each point's (cos, sin) of 2πft.
fn sine_chi2_with(t_d: &[f64], mags: &[f64], sigmas: &[f64], f: f64, cs: &mut [(f64, f64)]) -> f64 {
    let mut n = [[0.0f64; 3]; 3];
    let mut r = [0.0f64; 3];
    for (((t, m), s), c) in t_d.iter().zip(mags).zip(sigmas).zip(cs.iter_mut()) {
        let x = 2.0 * PI * f * t;
        *c = (x.cos(), x.sin());
        let row = [1.0, c.0, c.1];
        let w = 1.0 / (s * s);
        for i in 0..3 {
            r[i] += w * row[i] * m;
            for j in 0..3 {
                n[i][j] += w * row[i] * row[j];
            }
        }
    }
    // The stack inverse: the same arithmetic as crate::linalg::spd_inverse
    // (bit-identical), without its allocations.
    let inv = match crate::linalg::spd_inverse_n(&n) {
        Ok(i) => i,
        Err(_) => return f64::INFINITY,
    };
    let c: [f64; 3] = std::array::from_fn(|i| (0..3).map(|j| inv[i][j] * r[j]).sum());
    t_d.iter()
        .zip(mags)
        .zip(sigmas)
        .zip(cs.iter())
        .map(|(((_, m), s), (cos, sin))| ((m - c[0] - c[1] * cos - c[2] * sin) / s).powi(2))
        .sum()
}

/// One observed time of maximum light.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Maximum {
    /// BJD_TDB of the maximum.
    pub bjd: f64,
    /// Its 1σ error, days (`None`: unknown, the scatter of the fit sets it).
    pub err_d: Option<f64>,
}

/// One maximum in the O−C fit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OcPoint {
    /// BJD_TDB.
    pub bjd: f64,
    /// Cycle number from the old epoch.
    pub cycle: i64,
    /// Observed minus computed with the old ephemeris, days.
    pub o_minus_c_old_d: f64,
    /// Observed minus computed with the new ephemeris, days.
    pub o_minus_c_new_d: f64,
}

/// An ephemeris updated from observed maxima.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EphemerisUpdate {
    /// The ephemeris before.
    pub old: Ephemeris,
    /// The fitted ephemeris: period, epoch (the cycle nearest the data's
    /// weighted middle, where the two are least correlated) and their errors.
    pub new: Ephemeris,
    /// The maxima with their cycle numbers and residuals.
    pub points: Vec<OcPoint>,
    /// χ² per degree of freedom of the fit (`None` with errors unknown).
    pub reduced_chi2: Option<f64>,
    /// Whether the old ephemeris entered the fit as prior information
    /// (false: it had no errors, or the maxima put its period more than 3σ
    /// away and it was dropped; the notes say which).
    pub prior_used: bool,
    /// The fit on the first k maxima in time order, k = 2 (3 without
    /// errors) up to all: how period and epoch sharpen as maxima accumulate.
    pub progress: Vec<OcStep>,
    /// What the fit assumed or warns about.
    pub notes: Vec<String>,
}

/// The ephemeris fitted to the first `maxima` observed maxima.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OcStep {
    /// Maxima used.
    pub maxima: usize,
    /// BJD_TDB of the last of them.
    pub last_bjd: f64,
    /// Fitted period, days.
    pub period_d: f64,
    /// Its 1σ error, days.
    pub period_err_d: f64,
    /// Fitted epoch (the maximum nearest their weighted middle), BJD_TDB.
    pub epoch_max_bjd: f64,
    /// Its 1σ error, days.
    pub epoch_err_d: f64,
    /// Whether this step's fit used the old ephemeris as prior information
    /// (steps with and without it are not comparable: the prior adds
    /// information the maxima alone do not have).
    pub prior_used: bool,
    /// χ² per degree of freedom of this step's fit (`None` with errors
    /// unknown or no degree of freedom); above 1 the errors were scaled up
    /// by its square root.
    pub reduced_chi2: Option<f64>,
}

/// The linear ephemeris T_max(n) = E + P n fitted by weighted least squares
/// to `maxima` (BJD_TDB with their errors), the cycle numbers n counted from
/// `old`'s epoch with `old`'s period, with the old ephemeris as prior
/// information (its period and, when known, its epoch with their errors and
/// covariance, added to the normal equations: the weighted least squares of
/// the maxima and the prior together; a prior the maxima put more than 3σ
/// away is dropped and said, the period having changed). Source: least
/// squares with prior information (e.g. Press et al., Numerical Recipes,
/// 3rd ed., § 15.4, quoted from memory; common practice). The epoch is moved to the cycle nearest
/// the weighted mean cycle, so that E and P are nearly uncorrelated; their
/// errors and covariance come from (AᵀWA)⁻¹, scaled by √χ²_ν when the
/// scatter exceeds the errors given (common practice), or from the scatter
/// alone when no errors are given (then three maxima at least). Refused when a
/// maximum lies more than 0.25 cycle from its predicted time (the cycle count
/// is ambiguous) or the maxima cover fewer than two cycles.
pub fn update_ephemeris(old: &Ephemeris, maxima: &[Maximum]) -> Result<EphemerisUpdate> {
    let mut u = fit_oc(old, maxima)?;
    let mut sorted = maxima.to_vec();
    sorted.sort_by(|a, b| {
        a.bjd
            .partial_cmp(&b.bjd)
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let first = if maxima.iter().all(|m| m.err_d.is_some()) {
        2
    } else {
        3
    };
    u.progress = (first..=sorted.len())
        .filter_map(|k| {
            // A prefix spanning fewer than two cycles fixes no period: skipped.
            let f = fit_oc(old, &sorted[..k]).ok()?;
            Some(OcStep {
                maxima: k,
                last_bjd: sorted[k - 1].bjd,
                period_d: f.new.period_d,
                period_err_d: f.new.period_err_d,
                epoch_max_bjd: f.new.epoch_max_bjd,
                epoch_err_d: f.new.epoch_err_d,
                prior_used: f.prior_used,
                reduced_chi2: f.reduced_chi2,
            })
        })
        .collect();
    Ok(u)
}

fn fit_oc(old: &Ephemeris, maxima: &[Maximum]) -> Result<EphemerisUpdate> {
    if maxima.len() < 2 {
        return Err(RungError::invalid(
            "maxima",
            "an ephemeris needs at least two times of maximum",
        ));
    }
    let mut notes = Vec::new();
    let known = maxima.iter().all(|m| m.err_d.is_some());
    if !known && maxima.iter().any(|m| m.err_d.is_some()) {
        return Err(RungError::invalid(
            "maxima",
            "give an error for every time of maximum, or for none",
        ));
    }
    if !known && maxima.len() < 3 {
        return Err(RungError::invalid(
            "maxima",
            "without errors the scatter sets them: give at least three times of maximum",
        ));
    }
    let mut rows = Vec::with_capacity(maxima.len());
    for m in maxima {
        if !(m.bjd.is_finite() && (2_400_000.0..=2_500_000.0).contains(&m.bjd)) {
            return Err(RungError::invalid(
                "maxima",
                format!("{} is not a full BJD_TDB such as 2461000.3276", m.bjd),
            ));
        }
        if let Some(e) = m.err_d
            && !(e.is_finite() && e > 0.0 && e < old.period_d)
        {
            return Err(RungError::invalid(
                "maxima",
                format!(
                    "error {e} d of the maximum at {} is not positive and below the period",
                    m.bjd
                ),
            ));
        }
        let x = (m.bjd - old.epoch_max_bjd) / old.period_d;
        let n = x.round();
        if (x - n).abs() > 0.25 {
            return Err(RungError::invalid(
                "maxima",
                format!(
                    "the maximum at BJD {} falls {:.2} cycle from the one predicted for cycle {} (P = {} d): the cycle count is ambiguous; add maxima closer in time or fix the period first",
                    m.bjd,
                    x - n,
                    n,
                    old.period_d
                ),
            ));
        }
        rows.push((n as i64, m.bjd, m.err_d.unwrap_or(1.0)));
    }
    let cmin = rows.iter().map(|r| r.0).min().unwrap_or(0);
    let cmax = rows.iter().map(|r| r.0).max().unwrap_or(0);
    if cmax - cmin < 2 {
        return Err(RungError::invalid(
            "maxima",
            "the maxima span fewer than two cycles: the period is not constrained",
        ));
    }
    // Weighted mean cycle → the new reference cycle n0.
    let wsum: f64 = rows.iter().map(|r| 1.0 / (r.2 * r.2)).sum();
    let nbar: f64 = rows.iter().map(|r| r.0 as f64 / (r.2 * r.2)).sum::<f64>() / wsum;
    let n0 = nbar.round() as i64;
    // The old ephemeris as prior information on (E at cycle 0, P): its
    // information matrix (the inverse of its covariance; a component whose
    // error is unknown, 0, carries none).
    let prior = {
        let (se, sp, c) = (old.epoch_err_d, old.period_err_d, old.epoch_period_cov_d2);
        if se > 0.0 && sp > 0.0 {
            let det = se * se * sp * sp - c * c;
            (det > 0.0).then(|| [[sp * sp / det, -c / det], [-c / det, se * se / det]])
        } else if sp > 0.0 {
            Some([[0.0, 0.0], [0.0, 1.0 / (sp * sp)]])
        } else if se > 0.0 {
            Some([[1.0 / (se * se), 0.0], [0.0, 0.0]])
        } else {
            None
        }
    };
    let prior_rank = prior.map_or(0.0, |l| {
        f64::from(u8::from(l[0][0] > 0.0)) + f64::from(u8::from(l[1][1] > 0.0))
    });
    // Weighted least squares of y = T − E_old = E' + P (n − n0), E' the
    // maximum at cycle n0 relative to the old epoch, with the prior's
    // information added to the normal equations (a prior on g = M θ,
    // M = [[1, −n0], [0, 1]], mean (0, P_old)). Returns (E', P, C, χ²) with
    // χ² over the maxima and the prior.
    let solve = |rows: &[(i64, f64, f64)], prior: Option<[[f64; 2]; 2]>| {
        let (mut s00, mut s01, mut s11, mut r0, mut r1) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (n, t, e) in rows {
            let w = 1.0 / (e * e);
            let u = (n - n0) as f64;
            let y = t - old.epoch_max_bjd;
            s00 += w;
            s01 += w * u;
            s11 += w * u * u;
            r0 += w * y;
            r1 += w * u * y;
        }
        let k = n0 as f64;
        if let Some(l) = prior {
            // Mᵀ Λ M and Mᵀ Λ g0.
            s00 += l[0][0];
            s01 += -k * l[0][0] + l[0][1];
            s11 += k * k * l[0][0] - 2.0 * k * l[0][1] + l[1][1];
            r0 += l[0][1] * old.period_d;
            r1 += (-k * l[0][1] + l[1][1]) * old.period_d;
        }
        let det = s00 * s11 - s01 * s01;
        if det.is_nan() || det <= 0.0 {
            return None;
        }
        let (c00, c01, c11) = (s11 / det, -s01 / det, s00 / det);
        let e_rel = c00 * r0 + c01 * r1;
        let p = c01 * r0 + c11 * r1;
        let mut chi2: f64 = rows
            .iter()
            .map(|(n, t, e)| ((t - old.epoch_max_bjd - e_rel - p * (n - n0) as f64) / e).powi(2))
            .sum();
        if let Some(l) = prior {
            let g = [e_rel - k * p, p - old.period_d];
            chi2 +=
                g[0] * (l[0][0] * g[0] + l[0][1] * g[1]) + g[1] * (l[1][0] * g[0] + l[1][1] * g[1]);
        }
        Some((e_rel, p, c00, c01, c11, chi2))
    };
    let no_fix = || RungError::invalid("maxima", "the maxima do not fix a period");
    let n_data = rows.len() as f64;
    // Without errors the maxima's scatter about the fit without the prior
    // sets them; the prior then weighs against that scatter.
    if !known {
        let (.., chi2) = solve(&rows, None).ok_or_else(no_fix)?;
        let s = (chi2 / (n_data - 2.0)).sqrt();
        notes.push(format!(
            "no errors given for the maxima: their scatter about the fit ({s:.4} d) sets them"
        ));
        if s > 0.0 {
            for r in &mut rows {
                r.2 = s;
            }
        }
    }
    // The prior, unless the maxima contradict it (the period changed, or its
    // error was too small): beyond 3σ of the two together, it is dropped.
    let data_only = solve(&rows, None).ok_or_else(no_fix)?;
    let mut use_prior = prior;
    if prior.is_some() && old.period_err_d > 0.0 {
        let gap = (data_only.1 - old.period_d).abs();
        let sig = (data_only.4 + old.period_err_d.powi(2)).sqrt();
        if gap > 3.0 * sig {
            notes.push(format!(
                "the maxima put the period {:.1}σ from the old {} ± {} d: it has changed (or its error was too small), so the old ephemeris is not used as a prior",
                gap / sig,
                old.period_d,
                old.period_err_d
            ));
            use_prior = None;
        }
    }
    if use_prior.is_some() {
        notes.push(format!(
            "the old ephemeris is a prior of the fit (P = {} ± {} d{})",
            old.period_d,
            old.period_err_d,
            if old.epoch_err_d > 0.0 {
                format!(", epoch ± {} d", old.epoch_err_d)
            } else {
                String::new()
            }
        ));
    }
    let (e_rel, p, c00, c01, c11, chi2) = match use_prior {
        Some(_) => solve(&rows, use_prior).ok_or_else(no_fix)?,
        None => data_only,
    };
    let dof = n_data - 2.0 + if use_prior.is_some() { prior_rank } else { 0.0 };
    let (scale, red) = if known {
        let red = if dof > 0.0 { Some(chi2 / dof) } else { None };
        match red {
            Some(r) if r > 1.0 => {
                notes.push(format!(
                    "the maxima scatter {:.2} times more than their errors (χ²/ν = {r:.2}): the errors of the fit are scaled up by that",
                    r.sqrt()
                ));
                (r, red)
            }
            _ => (1.0, red),
        }
    } else {
        (1.0, None)
    };
    let new = Ephemeris {
        period_d: p,
        epoch_max_bjd: old.epoch_max_bjd + e_rel,
        period_err_d: (c11 * scale).sqrt(),
        epoch_err_d: (c00 * scale).sqrt(),
        epoch_period_cov_d2: c01 * scale,
    };
    crate::bounds::PERIOD_D.check_as("fitted period", p)?;
    let points = rows
        .iter()
        .map(|(n, t, _)| {
            let m = (t - new.epoch_max_bjd) / new.period_d;
            OcPoint {
                bjd: *t,
                cycle: *n,
                o_minus_c_old_d: t - (old.epoch_max_bjd + old.period_d * *n as f64),
                o_minus_c_new_d: t - (new.epoch_max_bjd + new.period_d * m.round()),
            }
        })
        .collect();
    Ok(EphemerisUpdate {
        old: *old,
        new,
        points,
        reduced_chi2: red,
        prior_used: use_prior.is_some(),
        progress: Vec::new(),
        notes,
    })
}

/// The per-point error of an observation at signal-to-noise `snr` with a
/// calibration floor `floor_mag` in quadrature, mag.
pub fn point_sigma_mag(snr: f64, floor_mag: f64) -> f64 {
    ((MAG_PER_INV_SNR / snr).powi(2) + floor_mag * floor_mag).sqrt()
}

/// A small deterministic generator for the recovery check (64-bit LCG,
/// Knuth's MMIX constants; Box–Muller deviates).
struct Lcg(u64);
impl Lcg {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let u1 = self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
    }
}

/// How the proposed times recover simulated stars: for `trials` periods
/// spread evenly in log P over the range (each with a phase of its own), a
/// sinusoid of the plan's semi-amplitude plus Gaussian noise of its per-point
/// error is searched from 1/P_max to 1/P_min ([`best_frequency`]); a star
/// counts as recovered when the period found lies within 5 σ_P (and 1 %) of
/// the true one. Deterministic (fixed seed). Returns (recovered, trials, worst
/// relative error).
pub fn recovery_check(plan: &DiscoveryPlan, trials: usize) -> (usize, usize, f64) {
    let t0 = plan.bjd_tdb.first().copied().unwrap_or(0.0);
    let t: Vec<f64> = plan.bjd_tdb.iter().map(|b| b - t0).collect();
    let sig = vec![plan.sigma_point_mag; t.len()];
    let mut rng = Lcg(0x5eed_cafe_f00d_0001);
    let (lo, hi) = (plan.period_min_d.ln(), plan.period_max_d.ln());
    let mut ok = 0;
    let mut worst: f64 = 0.0;
    for i in 0..trials {
        let p = (lo + (hi - lo) * (i as f64 + 0.5) / trials as f64).exp();
        let ph = rng.uniform();
        let m: Vec<f64> = t
            .iter()
            .map(|x| {
                15.0 - plan.semi_amplitude_mag * (2.0 * PI * (x / p - ph)).cos()
                    + plan.sigma_point_mag * rng.normal()
            })
            .collect();
        let Ok((f, _)) = best_frequency(
            &t,
            &m,
            &sig,
            1.0 / plan.period_max_d,
            1.0 / plan.period_min_d,
        ) else {
            continue;
        };
        let pf = 1.0 / f;
        let rel = (pf - p).abs() / p;
        let sp = period_sigma_d(
            p,
            t.len(),
            plan.sigma_point_mag,
            plan.semi_amplitude_mag,
            plan.span_d,
        );
        worst = worst.max(rel);
        if (pf - p).abs() <= 5.0 * sp.max(1e-9) || rel < 1e-3 {
            ok += 1;
        }
    }
    (ok, trials, worst)
}
