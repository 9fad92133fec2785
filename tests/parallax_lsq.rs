//! The least-squares precision of a parallax schedule: against numpy, the
//! known behaviour of one season against several years, and bad input.

mod parallax_support;

use rung::astro::time::Instant;
use rung::ladder::parallax::{EpochObs, astrometry::EpochError, parallax_factors_at, solve};

fn obs_of(case: &serde_json::Value) -> Vec<EpochObs> {
    case["epochs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| EpochObs {
            t_yr: e["t_yr"].as_f64().unwrap(),
            pf_ra: e["pf_ra"].as_f64().unwrap(),
            pf_dec: e["pf_dec"].as_f64().unwrap(),
            sigma_mas: e["sigma_mas"].as_f64().unwrap(),
        })
        .collect()
}

/// Source: numpy (tests/reference/make_parallax_fixtures.py): the covariance
/// inv(RᵀR) from the QR factorisation of the whitened design matrix, an
/// independent route from rung's Cholesky of the normal matrix; epochs with
/// factors from erfa.epv00. Agreement to 1e-8 relative.
#[test]
fn covariance_matches_numpy() {
    let f = parallax_support::fixtures();
    for case in f["lsq"].as_array().unwrap() {
        let sol = solve(&obs_of(case)).unwrap();
        let name = case["name"].as_str().unwrap();
        let cov = case["covariance"].as_array().unwrap();
        for i in 0..5 {
            for j in 0..5 {
                let want = cov[i][j].as_f64().unwrap();
                let scale = (cov[i][i].as_f64().unwrap() * cov[j][j].as_f64().unwrap()).sqrt();
                let got = sol.covariance[i][j];
                assert!(
                    (got - want).abs() <= 1e-8 * scale,
                    "{name} C[{i}][{j}] {got} vs {want}"
                );
            }
        }
        let rel = |a: f64, b: f64| ((a - b) / b).abs();
        assert!(
            rel(
                sol.sigma_parallax_mas,
                case["sigma_parallax_mas"].as_f64().unwrap()
            ) < 1e-8
        );
        assert!(
            rel(
                sol.sigma_pm_ra_masyr,
                case["sigma_pm_ra_masyr"].as_f64().unwrap()
            ) < 1e-8
        );
        assert!(
            rel(
                sol.sigma_pm_dec_masyr,
                case["sigma_pm_dec_masyr"].as_f64().unwrap()
            ) < 1e-8
        );
        assert!(
            (sol.corr_parallax_pm_ra - case["corr_parallax_pm_ra"].as_f64().unwrap()).abs() < 1e-8
        );
        assert!(
            (sol.corr_parallax_pm_dec - case["corr_parallax_pm_dec"].as_f64().unwrap()).abs()
                < 1e-8
        );
    }
}

fn epochs(ra_deg: f64, dec_deg: f64, days: &[f64], sigma: f64) -> Vec<EpochObs> {
    let t0 = Instant::from_utc_calendar(2026, 12, 15, 3, 0, 0.0).unwrap();
    days.iter()
        .map(|d| {
            let t = t0.add_seconds(d * 86_400.0);
            let (a, b) = parallax_factors_at(t, ra_deg.to_radians(), dec_deg.to_radians()).unwrap();
            EpochObs {
                t_yr: t.julian_epoch_tt(),
                pf_ra: a,
                pf_dec: b,
                sigma_mas: sigma,
            }
        })
        .collect()
}

/// Known behaviour (SCIENCE.md, Parallax; common practice): proper motion and
/// parallax separate only with a baseline of about two years or more. One
/// season of 12 epochs leaves ϖ strongly correlated with μ (|r| > 0.8) and poorly
/// determined; the same 12 epochs spread over three years (two seasons a year)
/// give a small correlation and a σ_ϖ many times smaller.
#[test]
fn one_season_cannot_separate_proper_motion_from_parallax() {
    let one: Vec<f64> = (0..12).map(|k| 8.0 * k as f64).collect();
    let mut three = Vec::new();
    for yr in 0..3 {
        for centre in [20.0, 200.0] {
            three.push(365.25 * yr as f64 + centre);
            three.push(365.25 * yr as f64 + centre + 15.0);
        }
    }
    for (ra, dec) in [(61.3, -18.4), (189.7, -27.6), (334.1, -1.3)] {
        let s1 = solve(&epochs(ra, dec, &one, 4.0)).unwrap();
        let s3 = solve(&epochs(ra, dec, &three, 4.0)).unwrap();
        assert!(
            s1.corr_parallax_pm.abs() > 0.8,
            "{ra},{dec}: one-season corr {}",
            s1.corr_parallax_pm
        );
        assert!(
            s3.corr_parallax_pm.abs() < 0.5,
            "{ra},{dec}: three-year corr {}",
            s3.corr_parallax_pm
        );
        assert!(
            s1.sigma_parallax_mas > 5.0 * s3.sigma_parallax_mas,
            "{ra},{dec}: {} vs {}",
            s1.sigma_parallax_mas,
            s3.sigma_parallax_mas
        );
        assert!(s1.sigma_pm_masyr > 5.0 * s3.sigma_pm_masyr);
        assert!(s3.baseline_yr > 2.0 && s1.baseline_yr < 0.3);
    }
}

/// With the epochs fixed, σ_ϖ scales with the per-epoch error (linearity of
/// least squares: a fact of the method) and falls as 1/√N when each epoch is
/// repeated N times.
#[test]
fn sigma_scales_with_epoch_error_and_count() {
    let days = [20.0, 35.0, 200.0, 215.0, 385.0, 400.0, 565.0, 580.0];
    let a = solve(&epochs(61.3, -18.4, &days, 2.0)).unwrap();
    let b = solve(&epochs(61.3, -18.4, &days, 6.0)).unwrap();
    assert!((b.sigma_parallax_mas / a.sigma_parallax_mas - 3.0).abs() < 1e-9);
    let mut four = Vec::new();
    for _ in 0..4 {
        four.extend(epochs(61.3, -18.4, &days, 2.0));
    }
    let c = solve(&four).unwrap();
    assert!((a.sigma_parallax_mas / c.sigma_parallax_mas - 2.0).abs() < 1e-9);
}

/// The per-epoch error adds its terms in quadrature (independent errors;
/// docs/science.md, Parallax): with only the floor left the total is the
/// floor, and each term enters as its square.
#[test]
fn epoch_error_terms() {
    let e = EpochError::new(0.0, 0.0, 0.0, 0.0, 1.5);
    assert!((e.total_mas - 1.5).abs() < 1e-12);
    let c = 1200.0 / 235.0;
    let e = EpochError::new(c, 2.0, 3.0, 1.0 * 3f64.sqrt(), 1.5);
    assert!((e.total_mas - (c * c + 4.0 + 9.0 + 3.0 + 2.25f64).sqrt()).abs() < 1e-9);
}

/// Bad input: an empty epoch list, too few epochs, epochs all at one instant.
#[test]
fn bad_epoch_lists_give_clear_errors() {
    let e = solve(&[]).unwrap_err().to_string();
    assert!(e.contains("empty"), "{e}");
    let two = epochs(61.3, -18.4, &[0.0, 180.0], 3.0);
    let e = solve(&two).unwrap_err().to_string();
    assert!(e.contains("at least three"), "{e}");
    let same = epochs(61.3, -18.4, &[10.0, 10.0, 10.0, 10.0], 3.0);
    let e = solve(&same).unwrap_err().to_string();
    assert!(e.contains("cannot separate"), "{e}");
    let mut bad = epochs(61.3, -18.4, &[0.0, 100.0, 200.0], 3.0);
    bad[1].sigma_mas = -1.0;
    let e = solve(&bad).unwrap_err().to_string();
    assert!(e.contains("epoch 2"), "{e}");
}
