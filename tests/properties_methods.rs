//! Property tests of the distance methods' invariants (issue: hardening):
//! phase in [0, 1); σ_d/d positive and falling as epochs are added, for each
//! method's own precision model; for the transient method also falling as the
//! signal-to-noise rises, a finite distance, and typed refusals of bad input.

use proptest::prelude::*;
use rung::astro::bary::Bjd;
use rung::astro::time::Instant;
use rung::ladder::BandExposure;
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

// The transient method through its own face (`Method::predict`): the Fisher
// matrix of the five light-curve parameters over the epochs, each exposing in
// B, V and R, then the distance budget (docs/science.md, Thermonuclear
// supernovae). Invented transients at the invented demo site
// (tests/transient_support); `predict` uses only the epochs' times and each
// band's SNR, not the site or the exposure model, so each case costs little.

mod transient_support;

use rung::RungError;
use rung::io::targets::Target;
use rung::ladder::transient::{ChaseOptions, FlatLcdm, TransientMethod, default_limits};
use rung::ladder::{Epoch, Method};
use transient_support::{TestPhotometer, cfg as sn_cfg, chase_setting, site, transient};

/// An invented transient discovered on 2026-11-20 at 06:00 UTC, in B, with
/// `peak_mag` given or (None) from its distance, and no discovery magnitude.
fn sn(peak_mag: Option<f64>, z: f64, extinction_mag: f64) -> Target {
    let mut t = transient("TEST-SN", 52.0, -28.0, "2026-11-20T06:00:00Z", 0.0, z);
    t.mag_now = None;
    t.peak_mag = peak_mag;
    t.extinction_mag = extinction_mag;
    t
}

fn method(dm15: f64) -> TransientMethod {
    TransientMethod::with(
        sn_cfg(),
        ChaseOptions {
            dm15: Some(dm15),
            classification: Some("Ia".into()),
            ..Default::default()
        },
    )
}

/// σ_d/d (percent) that `predict` gives for epochs at `days` (observed days
/// from the predicted maximum) with signal-to-noise `snr` in B, V and R,
/// Δm15 = `dm15`.
fn sn_pct(t: &Target, dm15: f64, days: &[f64], snr: &[f64]) -> Result<f64, RungError> {
    let site = site();
    let m = method(dm15);
    let facts = m.facts(t)?;
    let model = m.model(t, &facts)?;
    let std = m.standardizer()?;
    let t_max = m.place(t, &facts, &model, &std, dm15)?.params.t_max_mjd;
    let epochs: Vec<Epoch> = days
        .iter()
        .zip(snr)
        .map(|(d, s)| Epoch {
            time: Instant::from_jd_utc(t_max + d + 2_400_000.5).unwrap(),
            exptime_s: 180.0,
            n_exposures: 3,
            snr: *s,
            airmass: 1.2,
            visit_s: 360.0,
            exposures: ["B", "V", "R"]
                .iter()
                .flat_map(|b| BandExposure::single(b, 60.0, 1, *s))
                .collect(),
        })
        .collect();
    let s = chase_setting(&site, t, 60, default_limits());
    Ok(m.predict(&s, &TestPhotometer, &epochs)?
        .distance_precision_pct)
}

/// The floor of σ_d/d (percent): everything photometry cannot remove.
fn floor_pct(t: &Target) -> f64 {
    let m = method(1.1);
    let facts = m.facts(t).unwrap();
    let model = m.model(t, &facts).unwrap();
    m.standardizer()
        .unwrap()
        .budget(&m.cfg, &model, None, facts.role, facts.z)
        .unwrap()
        .floor_pct
}

/// A cadence that brackets maximum and reaches past +15 d, so that every
/// light-curve parameter is constrained: `n` epochs evenly from `start`
/// (before maximum) over `span` days.
fn cadence(n: usize, start: f64, span: f64) -> Vec<f64> {
    (0..n)
        .map(|i| start + span * i as f64 / (n - 1) as f64)
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, .. ProptestConfig::default() })]

    /// Valid input: σ_d/d is finite, positive and never below the floor the
    /// photometry cannot remove; adding epochs anywhere on the curve or
    /// raising every epoch's SNR never makes it worse, because each adds a
    /// positive semi-definite term to the Fisher matrix (Fisher 1925; a
    /// property of the Cramér–Rao bound, common practice).
    #[test]
    fn transient_sigma_positive_above_floor_and_falls_with_data_and_snr(
        peak in 13.0f64..19.0,
        z in 0.003f64..0.08,
        a_mag in 0.0f64..0.5,
        dm15 in 0.8f64..1.55,
        n in 6usize..14,
        start in -10.0f64..-2.0,
        span in 25.0f64..55.0,
        snr in 10.0f64..200.0,
        extra in proptest::collection::vec(-8.0f64..60.0, 1..8),
        gain in 1.1f64..5.0,
    ) {
        let t = sn(Some(peak), z, a_mag);
        let days = cadence(n, start, span);
        let base = sn_pct(&t, dm15, &days, &vec![snr; n]).unwrap();
        let floor = floor_pct(&t);
        prop_assert!(base.is_finite() && base > 0.0, "σd/d {base}");
        prop_assert!(base >= floor * (1.0 - 1e-12), "σd/d {base} below the floor {floor}");
        let mut more = days.clone();
        more.extend(&extra);
        let with_more = sn_pct(&t, dm15, &more, &vec![snr; more.len()]).unwrap();
        prop_assert!(with_more.is_finite() && with_more > 0.0);
        prop_assert!(with_more <= base * (1.0 + 1e-9), "{} more epochs: {with_more} > {base}", extra.len());
        let deeper = sn_pct(&t, dm15, &days, &vec![snr * gain; n]).unwrap();
        prop_assert!(deeper <= base * (1.0 + 1e-9), "SNR ×{gain}: {deeper} > {base}");
        prop_assert!(deeper >= floor * (1.0 - 1e-12));
    }

    /// Valid input gives a finite, positive distance: μ = m_B − A_B −
    /// M(standardized) and d = 10^(μ/5 + 1) pc (the distance modulus, a fact
    /// of the trade). When the peak itself comes from the redshift, the
    /// standardized distance is flat ΛCDM's luminosity distance at that
    /// redshift to rounding: placement and standardization invert each other.
    #[test]
    fn transient_distance_is_finite_and_inverts_the_luminosity_distance(
        peak in 12.0f64..21.0,
        z in 0.001f64..0.29,
        a_mag in 0.0f64..1.0,
        dm15 in 0.75f64..1.95,
    ) {
        let m = method(dm15);
        let mu = |t: &Target| -> f64 {
            let facts = m.facts(t).unwrap();
            let model = m.model(t, &facts).unwrap();
            let std = m.standardizer().unwrap();
            let p = m.place(t, &facts, &model, &std, dm15).unwrap().params;
            std.distance_modulus(&m.cfg, &model, &p)
        };
        let d_pc = 10f64.powf(mu(&sn(Some(peak), z, a_mag)) / 5.0 + 1.0);
        prop_assert!(d_pc.is_finite() && d_pc > 0.0, "d = {d_pc} pc");
        let d_h = 10f64.powf(mu(&sn(None, z, a_mag)) / 5.0 + 1.0);
        let c = &m.cfg.cosmology;
        let d_l = FlatLcdm::new(c.h0_km_s_mpc, c.omega_m).unwrap().luminosity_distance_mpc(z).unwrap() * 1.0e6;
        prop_assert!((d_h / d_l - 1.0).abs() < 1e-9, "{d_h} pc against d_L = {d_l} pc");
    }

    /// Bad input is refused with a typed error naming the field, never a panic:
    /// a redshift below 0, beyond the model's 0.3 (or not a number), a Δm15
    /// outside the range the standardization is used for, a luminosity
    /// distance at a redshift that is not positive.
    #[test]
    fn transient_bad_input_gives_typed_errors(
        bad_z in prop_oneof![
            -50.0f64..-1e-9,
            0.300_001f64..1e6,
            Just(f64::NAN),
            Just(f64::INFINITY),
            Just(f64::NEG_INFINITY),
        ],
        bad_dm15 in prop_oneof![
            -5.0f64..0.749,
            1.951f64..20.0,
            Just(f64::NAN),
        ],
        bad_dist_z in prop_oneof![-5.0f64..=0.0, Just(f64::NAN)],
    ) {
        let days = cadence(8, -6.0, 40.0);
        let snr = vec![50.0; 8];
        match sn_pct(&sn(Some(16.0), bad_z, 0.1), 1.1, &days, &snr) {
            Err(RungError::Invalid { what, .. }) => prop_assert_eq!(what, "redshift"),
            other => prop_assert!(false, "redshift {bad_z}: {other:?}"),
        }
        let t = sn(Some(16.0), 0.02, 0.1);
        let site = site();
        let s = chase_setting(&site, &t, 60, default_limits());
        match method(bad_dm15).predict(&s, &TestPhotometer, &[]) {
            Err(RungError::Invalid { what, .. }) => prop_assert_eq!(what, "dm15"),
            other => prop_assert!(false, "dm15 {bad_dm15}: {other:?}"),
        }
        let c = &sn_cfg().cosmology;
        match FlatLcdm::new(c.h0_km_s_mpc, c.omega_m).unwrap().distance_modulus(bad_dist_z) {
            Err(RungError::Invalid { what, .. }) => prop_assert_eq!(what, "redshift"),
            other => prop_assert!(false, "distance at z {bad_dist_z}: {other:?}"),
        }
    }
}
