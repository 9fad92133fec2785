//! Finding when a smooth quantity crosses a threshold: bracket on a coarse
//! grid, then close in on the root by regula falsi with the Illinois
//! modification (Dowell & Jarratt 1971, BIT 11, 168; from memory), which
//! converges superlinearly on a bracket: two to four evaluations reach the
//! millisecond where a bisection from a 600 s bracket takes ten to reach 1 s.

use crate::astro::time::Instant;

/// A threshold crossing.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Crossing {
    /// When it happens (within the refinement tolerance).
    pub t: Instant,
    /// True when the quantity goes from below to above the threshold.
    pub rising: bool,
}

/// The root of `f` (offsets in seconds) inside the bracket `[a, b]` where
/// `f(a) = fa` and `f(b) = fb` differ in sign (`fa ≥ 0` is "above"), by
/// Illinois regula falsi to `tol_s` seconds. The answer always lies inside
/// the bracket, so a discontinuous `f` still yields a point of its sign change.
pub fn illinois(
    f: &mut dyn FnMut(f64) -> f64,
    a: f64,
    fa: f64,
    b: f64,
    fb: f64,
    tol_s: f64,
) -> f64 {
    let (mut x0, mut f0, mut x1, mut f1) = (a, fa, b, fb);
    let above0 = f0 >= 0.0;
    let mut side = 0;
    let mut last = f64::NAN;
    for _ in 0..100 {
        let w = x1 - x0;
        if w <= tol_s {
            break;
        }
        let mut x = if f1 != f0 {
            x0 - f0 * w / (f1 - f0)
        } else {
            0.5 * (x0 + x1)
        };
        // Stay strictly inside; a tiny margin keeps the bracket shrinking.
        let m = (0.01 * tol_s).min(0.25 * w);
        if !(x > x0 + m && x < x1 - m) {
            x = x.clamp(x0 + m, x1 - m);
        }
        let fx = f(x);
        if fx.is_nan() {
            x = 0.5 * (x0 + x1);
        }
        if (fx >= 0.0) == above0 {
            x0 = x;
            f0 = fx;
            if side == -1 {
                f1 *= 0.5;
            }
            side = -1;
        } else {
            x1 = x;
            f1 = fx;
            if side == 1 {
                f0 *= 0.5;
            }
            side = 1;
        }
        if (x - last).abs() < tol_s {
            return x;
        }
        last = x;
    }
    0.5 * (x0 + x1)
}

/// Refine a sign change of `f` between `a` (value `fa`) and `b` (value `fb`)
/// to `tol_s` seconds ([`illinois`] on the offsets from `a`).
pub fn refine(
    f: &mut dyn FnMut(Instant) -> f64,
    a: Instant,
    fa: f64,
    b: Instant,
    fb: f64,
    tol_s: f64,
) -> Instant {
    let span = b.seconds_since(&a);
    let mut g = |s: f64| f(a.add_seconds(s));
    let s = illinois(&mut g, 0.0, fa, span, fb, tol_s);
    a.add_seconds(s)
}

/// Every zero crossing of `f` on the sampled grid `ts` (values `vs`, which must
/// be `f` at `ts`), refined to `tol_s`.
pub fn crossings_on_grid(
    f: &mut dyn FnMut(Instant) -> f64,
    ts: &[Instant],
    vs: &[f64],
    tol_s: f64,
) -> Vec<Crossing> {
    let mut out = Vec::new();
    for i in 1..ts.len().min(vs.len()) {
        let (a, b) = (vs[i - 1], vs[i]);
        if !(a.is_finite() && b.is_finite()) {
            continue;
        }
        if (a >= 0.0) != (b >= 0.0) {
            let t = refine(f, ts[i - 1], a, ts[i], b, tol_s);
            out.push(Crossing {
                t,
                rising: b >= 0.0,
            });
        }
    }
    out
}

/// An evenly spaced grid from `start` to `end` inclusive with at most `step_s` spacing.
pub fn grid(start: Instant, end: Instant, step_s: f64) -> Vec<Instant> {
    let span = end.seconds_since(&start);
    let n = (span / step_s).ceil().max(1.0) as usize;
    let h = span / n as f64;
    // Build through TAI offsets from the start to keep leap seconds exact.
    (0..=n).map(|i| start.add_seconds(i as f64 * h)).collect()
}

/// Intervals where `vs` (sampled on `ts`) is ≥ 0, with edges refined by `f` to `tol_s`.
pub fn positive_intervals(
    f: &mut dyn FnMut(Instant) -> f64,
    ts: &[Instant],
    vs: &[f64],
    tol_s: f64,
) -> Vec<(Instant, Instant)> {
    let mut out = Vec::new();
    if ts.is_empty() {
        return out;
    }
    let mut open: Option<Instant> = if vs[0] >= 0.0 { Some(ts[0]) } else { None };
    for c in crossings_on_grid(f, ts, vs, tol_s) {
        if c.rising {
            open = Some(c.t);
        } else if let Some(s) = open.take() {
            out.push((s, c.t));
        }
    }
    if let Some(s) = open {
        out.push((s, *ts.last().unwrap_or(&s)));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::time::parse_instant;

    #[test]
    fn finds_sine_crossings_to_a_second() {
        let t0 = parse_instant("2026-06-01T00:00:00Z").unwrap();
        let period = 86_400.0;
        let mut f =
            |t: Instant| (2.0 * std::f64::consts::PI * t.seconds_since(&t0) / period).sin() - 0.5;
        let ts = grid(t0, t0.add_seconds(period), 600.0);
        let vs: Vec<f64> = ts.iter().map(|t| f(*t)).collect();
        let c = crossings_on_grid(&mut f, &ts, &vs, 1.0);
        assert_eq!(c.len(), 2);
        // sin x = 0.5 at x = π/6 and 5π/6 of a 24 h period: 2 h and 10 h.
        assert!((c[0].t.seconds_since(&t0) - 2.0 * 3600.0).abs() < 1.0);
        assert!(c[0].rising);
        assert!((c[1].t.seconds_since(&t0) - 10.0 * 3600.0).abs() < 1.0);
        let iv = positive_intervals(&mut f, &ts, &vs, 1.0);
        assert_eq!(iv.len(), 1);
    }
}
