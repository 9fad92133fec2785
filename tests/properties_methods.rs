//! Property tests of the distance methods' invariants (issue: hardening):
//! phase in [0, 1); σ_d/d positive and falling as epochs are added, for each
//! method's own precision model.

use proptest::prelude::*;
use rung::astro::bary::Bjd;
use rung::astro::time::Instant;
use rung::ladder::parallax::{EpochObs, parallax_factors_at, solve};
use rung::ladder::pulsator::{Ephemeris, frac_phase, mean_mag_sigma};

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, .. ProptestConfig::default() })]

    #[test]
    fn phase_is_in_zero_one(
        period_d in 0.05f64..200.0,
        e0_off in 0.0f64..20_000.0,
        t_off in -30_000.0f64..30_000.0,
        frac in 0.0f64..1.0,
    ) {
        let e = Ephemeris::new(Some(period_d), Some(2_440_000.0 + e0_off), Some(0.0)).unwrap();
        let b = Bjd { jd1: 2_440_000.0 + e0_off + t_off.round(), jd2: frac };
        let ph = e.phase(&b);
        prop_assert!((0.0..1.0).contains(&ph), "phase {ph}");
        // Adding a whole number of periods does not change the phase.
        let b2 = Bjd { jd1: b.jd1 + 7.0 * period_d, jd2: b.jd2 };
        let d = (e.phase(&b2) - ph).abs();
        prop_assert!(d < 1e-6 || (1.0 - d) < 1e-6, "phase moved by {d}");
        prop_assert!((0.0..1.0).contains(&frac_phase(t_off / period_d)));
    }

    #[test]
    fn pulsator_mean_error_positive_and_falls_with_more_points(
        n in 8usize..40,
        sigma in 0.005f64..0.2,
        k in 1usize..4,
        shift in 0.0f64..1.0,
    ) {
        let phases = |m: usize| -> Vec<f64> { (0..m).map(|i| frac_phase(shift + i as f64 / m as f64)).collect() };
        let a = mean_mag_sigma(&phases(n), &vec![sigma; n], k).unwrap();
        let b = mean_mag_sigma(&phases(2 * n), &vec![sigma; 2 * n], k).unwrap();
        prop_assert!(a > 0.0 && b > 0.0);
        prop_assert!(b < a, "σ(2N) {b} is not below σ(N) {a}");
    }

    #[test]
    fn parallax_sigma_positive_and_falls_with_more_epochs(
        ra_deg in 0.0f64..360.0,
        dec_deg in -80.0f64..80.0,
        n_per_year in 4usize..10,
        sigma_mas in 1.0f64..10.0,
        plx_mas in 5.0f64..200.0,
    ) {
        let t0 = rung::astro::time::parse_instant("2026-01-10T06:00:00Z").unwrap();
        let obs = |years: usize| -> Vec<EpochObs> {
            let n = years * n_per_year;
            (0..n)
                .map(|i| {
                    let t: Instant = t0.add_seconds(i as f64 * 365.25 * 86_400.0 / n_per_year as f64 + 0.37 * 86_400.0);
                    let (pa, pd) = parallax_factors_at(t, ra_deg.to_radians(), dec_deg.to_radians()).unwrap();
                    EpochObs { t_yr: t.julian_epoch_tt(), pf_ra: pa, pf_dec: pd, sigma_mas }
                })
                .collect()
        };
        let s2 = solve(&obs(2)).unwrap();
        let s4 = solve(&obs(4)).unwrap();
        let d2 = s2.sigma_parallax_mas / plx_mas;
        let d4 = s4.sigma_parallax_mas / plx_mas;
        prop_assert!(d2 > 0.0 && d4 > 0.0);
        prop_assert!(d4 < d2, "σd/d with 4 years {d4} is not below 2 years {d2}");
    }
}
