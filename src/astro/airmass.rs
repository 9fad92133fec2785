//! Relative airmass.

/// Kasten & Young (1989), Applied Optics 28, 4735: relative optical airmass from
/// the apparent (refracted) altitude `alt_deg` in degrees,
/// X = 1 / [sin h + 0.50572 (h + 6.07995°)^−1.6364]. Valid to the horizon
/// (X ≈ 38 at h = 0); `None` below it. The fit dips below 1 within 1.4° of the
/// zenith (0.9997 at h = 90°); relative airmass is 1 at the zenith by
/// definition, so the result is never less than 1 and never falls as the
/// altitude falls.
pub fn kasten_young(alt_deg: f64) -> Option<f64> {
    if !alt_deg.is_finite() || !(0.0..=90.0).contains(&alt_deg) {
        return None;
    }
    let h = alt_deg;
    Some((1.0 / (h.to_radians().sin() + 0.50572 * (h + 6.07995).powf(-1.6364))).max(1.0))
}

/// Plane-parallel airmass sec z from the altitude in degrees (cross-check only;
/// it diverges towards the horizon). `None` at or below the horizon.
pub fn secant_z(alt_deg: f64) -> Option<f64> {
    if alt_deg.is_nan() || alt_deg <= 0.0 || alt_deg > 90.0 {
        return None;
    }
    Some(1.0 / alt_deg.to_radians().sin())
}

/// Apparent altitude (degrees) at which the Kasten–Young airmass equals `x` (≥ 1),
/// by bisection; used to turn an airmass limit into an altitude limit.
pub fn altitude_for_airmass_deg(x: f64) -> Option<f64> {
    if x.is_nan() || x < 1.0 || !x.is_finite() {
        return None;
    }
    let (mut lo, mut hi) = (0.0_f64, 90.0_f64);
    if x >= kasten_young(0.0)? {
        return Some(0.0);
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if kasten_young(mid)? > x {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kasten_young_published_values() {
        // Kasten & Young (1989), Applied Optics 28, 4735, their Table of relative
        // airmass (quoted from memory): 1.0000 at zenith, 1.9927 at h = 30°,
        // 5.5600 at 10°, 10.3163 at 5°, 38.0868 at the horizon.
        let cases = [
            (90.0, 1.0),
            (30.0, 1.9927),
            (10.0, 5.600),
            (5.0, 10.316),
            (0.0, 38.087),
        ];
        for (h, x) in cases {
            let got = kasten_young(h).unwrap();
            assert!((got - x).abs() / x < 0.008, "h={h}: {got} vs {x}");
        }
    }

    #[test]
    fn agrees_with_secant_above_30_degrees() {
        // SCIENCE.md: plane-parallel and Kasten–Young agree to < 0.5 % above 30°.
        for h in 30..=90 {
            let a = kasten_young(h as f64).unwrap();
            let b = secant_z(h as f64).unwrap();
            assert!((a - b).abs() / b < 0.005, "h={h}");
        }
    }

    #[test]
    fn inverse_airmass() {
        let h = altitude_for_airmass_deg(2.0).unwrap();
        assert!((kasten_young(h).unwrap() - 2.0).abs() < 1e-9);
        assert!(altitude_for_airmass_deg(0.5).is_none());
    }
}
