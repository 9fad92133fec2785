//! Discovering a period and updating an ephemeris (#16 item 5;
//! docs/science.md, Pulsating stars): the geometric cadence of Saunders,
//! Naylor & Allan (2006) placed on the nights of the demo site, a simulated
//! star recovered from it by a periodogram written here (independent of
//! rung's), and the O−C ephemeris fit against an independent least-squares
//! fit (numpy, tests/reference/make_oc_fixtures.py).

use rung::astro::frames::CatalogPlace;
use rung::astro::night::Limits;
use rung::io::sites;
use rung::ladder::pulsator::{
    DiscoveryInput, Ephemeris, Maximum, best_frequency, geometric_offsets, period_sigma_d,
    periodogram, plan_discovery, recovery_check, spectral_window, tallest_sidelobe,
    update_ephemeris,
};
use std::f64::consts::PI;

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

fn d(s: &str) -> chrono::NaiveDate {
    chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

#[test]
fn geometric_series_and_its_window_by_hand() {
    // t_k = T (x^k − 1)/(x^(N−1) − 1): N = 4, T = 7, x = 2 → 0, 1, 3, 7.
    let t = geometric_offsets(4, 7.0, 2.0);
    assert_eq!(t, vec![0.0, 1.0, 3.0, 7.0]);
    // x = 1: evenly spaced.
    assert_eq!(geometric_offsets(3, 4.0, 1.0), vec![0.0, 2.0, 4.0]);
    // The window of evenly spaced nightly points is 1 at 1 cycle/day: the
    // daily alias (a fact of the trade).
    let nightly: Vec<f64> = (0..20).map(|k| k as f64).collect();
    assert!((spectral_window(&nightly, 1.0) - 1.0).abs() < 1e-9);
    let (h, nu) = tallest_sidelobe(&nightly, 3.0);
    assert!(h > 0.999 && (nu - 1.0).abs() < 0.01, "{h} at {nu}");
    // Period error, by hand (Montgomery & O'Donoghue 1999, from memory):
    // P = 0.5 d, N = 20, σ = 0.02, A = 0.3, T = 30 d:
    // σ_P = 0.25 × √6 × 0.02 / (π √20 × 0.3 × 30) = 1.2247e-2/(126.45) = 9.686e-5 d.
    let s = period_sigma_d(0.5, 20, 0.02, 0.3, 30.0);
    assert!((s - 9.686e-5).abs() < 1e-8, "{s}");
}

fn plan() -> rung::ladder::pulsator::DiscoveryPlan {
    let site = sites::resolve("pampa-lucero").unwrap();
    let place = CatalogPlace::fixed_deg(47.9, -3.3);
    let limits = Limits::new(30.0, -12.0).unwrap();
    plan_discovery(&DiscoveryInput {
        site: &site,
        place: &place,
        from: d("2026-12-01"),
        to: d("2026-12-30"),
        limits: &limits,
        period_min_d: 0.3,
        period_max_d: 5.0,
        epochs: 24,
        sigma_point_mag: 0.02,
        semi_amplitude_mag: 0.25,
        dwell_s: 600.0,
    })
    .unwrap()
}

/// The independent check: a plain least-squares sinusoid periodogram,
/// written here (normal equations by Cramer's rule, not rung's code).
fn periodogram_best(t: &[f64], m: &[f64], f_lo: f64, f_hi: f64, step: f64) -> f64 {
    let mut best = (f_lo, f64::INFINITY);
    let mut f = f_lo;
    while f <= f_hi {
        let (mut s, mut c, mut ss, mut cc, mut sc, mut n, mut y, mut ys, mut yc) =
            (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
        for (ti, mi) in t.iter().zip(m) {
            let a = 2.0 * PI * f * ti;
            let (si, ci) = a.sin_cos();
            n += 1.0;
            s += si;
            c += ci;
            ss += si * si;
            cc += ci * ci;
            sc += si * ci;
            y += mi;
            ys += mi * si;
            yc += mi * ci;
        }
        // Solve [[n, c, s], [c, cc, sc], [s, sc, ss]] x = [y, yc, ys].
        let det3 = |a: [[f64; 3]; 3]| {
            a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
                - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
                + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0])
        };
        let a = [[n, c, s], [c, cc, sc], [s, sc, ss]];
        let b = [y, yc, ys];
        let d0 = det3(a);
        let mut x = [0.0; 3];
        for k in 0..3 {
            let mut ak = a;
            for r in 0..3 {
                ak[r][k] = b[r];
            }
            x[k] = det3(ak) / d0;
        }
        let chi2: f64 = t
            .iter()
            .zip(m)
            .map(|(ti, mi)| {
                let a = 2.0 * PI * f * ti;
                (mi - x[0] - x[1] * a.cos() - x[2] * a.sin()).powi(2)
            })
            .sum();
        if chi2 < best.1 {
            best = (f, chi2);
        }
        f += step;
    }
    best.0
}

#[test]
fn a_simulated_star_is_recovered_from_the_proposed_cadence() {
    let p = plan();
    assert_eq!(p.bjd_tdb.len(), 24);
    assert!(p.alias_free, "{p:?}");
    // Geometric spacing spread through the night lowers the daily alias
    // below that of one visit a night at the same clock time, whose window
    // is 1 at 1 cycle/day (a fact of the trade); from one site it stays.
    assert!(
        p.max_sidelobe < 0.9 && p.nightly_max_sidelobe > 0.99,
        "{} {}",
        p.max_sidelobe,
        p.nightly_max_sidelobe
    );
    // The test star's periodogram: the true peak first, every alias below it.
    let top = p.alias_peaks[0];
    assert!(
        top.true_peak && (top.period_d - p.test_period_d).abs() < 0.01 * p.test_period_d,
        "{:?}",
        p.alias_peaks
    );
    assert!(
        p.alias_peaks[1..]
            .iter()
            .all(|a| a.relative < 1.0 && !a.true_peak),
        "{:?}",
        p.alias_peaks
    );
    assert_eq!(p.periodogram_cpd.len(), p.periodogram_power.len());
    // The expected period error falls as observations accumulate.
    assert_eq!(p.progress.len(), 22);
    assert!(
        p.progress
            .windows(2)
            .all(|w| w[1].period_err_at_max_d <= w[0].period_err_at_max_d)
    );
    assert_eq!(
        p.progress.last().unwrap().period_err_at_max_d,
        p.period_err_at_max_d
    );
    assert_eq!(
        (p.recovered, p.trials),
        (
            rung::ladder::pulsator::RECOVERY_TRIALS,
            rung::ladder::pulsator::RECOVERY_TRIALS
        )
    );
    // Stars with periods across the range, the noise of the plan, recovered
    // by the periodogram written above on a grid of 1/(20 T).
    let t0 = p.bjd_tdb[0];
    let t: Vec<f64> = p.bjd_tdb.iter().map(|b| b - t0).collect();
    let mut rng = Lcg(42);
    for period in [0.31, 0.55, 0.93, 1.7, 2.9, 4.6] {
        let ph = rng.uniform();
        let m: Vec<f64> = t
            .iter()
            .map(|x| 14.0 - 0.25 * (2.0 * PI * (x / period - ph)).cos() + 0.02 * rng.normal())
            .collect();
        let f = periodogram_best(&t, &m, 1.0 / 5.0, 1.0 / 0.3, 1.0 / (20.0 * p.span_d));
        let found = 1.0 / f;
        // Within the grid step plus 5 σ_P of the truth: no alias.
        let sp = period_sigma_d(period, 24, 0.02, 0.25, p.span_d);
        let grid = period * period / (20.0 * p.span_d);
        assert!(
            (found - period).abs() < 5.0 * sp + grid,
            "P = {period}: found {found} (σ_P {sp}, grid {grid})"
        );
    }
    // rung's own recovery check agrees.
    let (ok, n, _) = recovery_check(&p, 8);
    assert_eq!(ok, n);
}

#[test]
fn the_periodogram_matches_astropy_lombscargle() {
    // tests/reference/lombscargle_fixtures.json: astropy LombScargle
    // (floating mean, standard normalisation, with errors) on invented light
    // curves; the spectral window by numpy.
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/lombscargle_fixtures.json"
    );
    let fx: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    let v = |c: &serde_json::Value, k: &str| -> Vec<f64> {
        c[k].as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    for c in fx["cases"].as_array().unwrap() {
        let name = c["name"].as_str().unwrap();
        let (t, m, e, f) = (v(c, "t_d"), v(c, "mag"), v(c, "err_mag"), v(c, "freq_cpd"));
        let ours = periodogram(&t, &m, &e, &f).unwrap();
        // 1e-7: one visit a night makes the fit near singular at whole
        // cycles per day, where the two solvers differ by rounding (~1e-8).
        for ((a, b), fr) in ours.iter().zip(v(c, "power")).zip(&f) {
            assert!((a - b).abs() < 1e-7, "{name} at {fr}: {a} vs astropy {b}");
        }
        for (fr, want) in f.iter().zip(v(c, "window")) {
            assert!(
                (spectral_window(&t, *fr) - want).abs() < 1e-9,
                "{name} window at {fr}"
            );
        }
        // The best frequency: astropy's on a grid of 1/(200 T); rung's refined.
        let (lo, hi) = (f[0], *f.last().unwrap());
        let (best, _) = best_frequency(&t, &m, &e, lo, hi).unwrap();
        let want = c["best_freq_cpd"].as_f64().unwrap();
        let step = c["best_grid_step_cpd"].as_f64().unwrap();
        let truth = 1.0 / c["period_d"].as_f64().unwrap();
        if name.starts_with("nightly") {
            // One visit a night: the aliases at n ± 1/P cycles/day stand as
            // tall as the truth, and the search settles on one of them
            // (astropy too; which one is decided by the noise and the grid).
            assert!(
                (want - truth).abs() > 0.5 && (best - truth).abs() > 0.5,
                "{name}: {want} {best}"
            );
            let pw = periodogram(&t, &m, &e, &[best, want]).unwrap();
            assert!((pw[0] / pw[1] - 1.0).abs() < 0.02, "{name}: {pw:?}");
        } else {
            assert!(
                (best - want).abs() <= step,
                "{name}: {best} vs astropy {want}"
            );
            assert!((want - truth).abs() < 0.01, "{name}: {want}");
        }
    }
}

#[test]
fn the_ephemeris_sharpens_as_maxima_accumulate() {
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/oc_fixtures.json"
    );
    let fx: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    let case = &fx["cases"][0];
    let old = Ephemeris::new(
        Some(case["old_period_d"].as_f64().unwrap()),
        Some(case["old_epoch_bjd"].as_f64().unwrap()),
        Some(case["old_period_err_d"].as_f64().unwrap()),
    )
    .unwrap();
    let maxima: Vec<Maximum> = case["maxima"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| Maximum {
            bjd: m[0].as_f64().unwrap(),
            err_d: m[1].as_f64(),
        })
        .collect();
    let u = update_ephemeris(&old, &maxima).unwrap();
    // k = 2..8 maxima; the period's formal error (before the χ²/ν scaling,
    // which grows when a new maximum disagrees with the rest) never grows as
    // maxima are added, the information only adding, among the steps that
    // agree on the prior: a step that drops the old ephemeris (the maxima put
    // its period more than 3σ away) loses the prior's information and is
    // compared only with steps that also dropped it.
    assert_eq!(u.progress.len(), 7);
    let formal = |p: &rung::ladder::pulsator::OcStep| {
        p.period_err_d / p.reduced_chi2.unwrap_or(1.0).max(1.0).sqrt()
    };
    for flag in [true, false] {
        let same: Vec<_> = u.progress.iter().filter(|p| p.prior_used == flag).collect();
        assert!(
            same.windows(2)
                .all(|w| formal(w[1]) <= formal(w[0]) * (1.0 + 1e-12)),
            "prior {flag}: {same:?}"
        );
    }
    // This star's period changed: the early steps lean on the prior, the
    // later ones (more maxima, a sharper period) have dropped it, and the
    // last step is the fit shown.
    assert!(u.progress[0].prior_used, "{:?}", u.progress);
    let last = u.progress.last().unwrap();
    assert!(!last.prior_used && !u.prior_used);
    assert_eq!(last.period_d, u.new.period_d);
    // Four maxima (the first fit without the prior) to eight: σ_P falls
    // from 6.3e-4 to 3.6e-4 d (scaled errors both), by more than 1.5.
    let first_without = u.progress.iter().find(|p| !p.prior_used).unwrap();
    assert_eq!(first_without.maxima, 4);
    assert!(
        first_without.period_err_d > 1.5 * last.period_err_d,
        "{:#?}",
        u.progress
    );
}

/// The old period as prior information, a case checked by hand. Weighted
/// least squares with a Gaussian prior (common practice; e.g. Press et al.,
/// Numerical Recipes, 3rd ed., § 15.4, from memory): with the maxima placed
/// symmetrically about the reference cycle the epoch and period decouple,
/// and the period is the inverse-variance weighted mean of the maxima's own
/// period and the prior's, with 1/σ_P² = Σu²/σ² + 1/σ_prior².
#[test]
fn the_old_period_enters_as_a_prior_checked_by_hand() {
    // Old P = 2.0000 ± 0.0005 d, epoch 2461000.0; three exact maxima of a
    // star whose period is 2.0006 d at cycles 0, 10, 20 (±0.01 d each).
    let old = Ephemeris::new(Some(2.0), Some(2_461_000.0), Some(0.0005)).unwrap();
    let maxima: Vec<Maximum> = [0.0, 10.0, 20.0]
        .iter()
        .map(|n| Maximum {
            bjd: 2_461_000.0 + 2.0006 * n,
            err_d: Some(0.01),
        })
        .collect();
    let u = update_ephemeris(&old, &maxima).unwrap();
    // By hand: u = −10, 0, 10 about n0 = 10; Σu²/σ² = 200/1e-4 = 2e6 d⁻²
    // (the maxima alone: P = 2.0006 ± 7.07e-4 d), 1/σ_prior² = 4e6 d⁻².
    // 2.0006 is 0.69σ from 2.0000, so the prior is used:
    // P = (2e6·2.0006 + 4e6·2.0000)/6e6 = 2.0002 d, σ_P = 1/√6e6 = 4.0825e-4 d;
    // the epoch at cycle 10 is the mean of the maxima, 2461020.006, σ_E =
    // 0.01/√3 = 0.0057735 d; χ² = 0.32 + 0.16 over ν = 2 stays below 1, no
    // scaling.
    assert!(u.prior_used, "{:?}", u.notes);
    assert!((u.new.period_d - 2.0002).abs() < 1e-9, "{}", u.new.period_d);
    assert!(
        (u.new.period_err_d - 4.0825e-4).abs() < 1e-8,
        "{}",
        u.new.period_err_d
    );
    assert!((u.new.epoch_max_bjd - 2_461_020.006).abs() < 1e-7);
    assert!((u.new.epoch_err_d - 0.0057735).abs() < 1e-7);
    assert!((u.reduced_chi2.unwrap() - 0.24).abs() < 1e-6);
    assert!(u.notes.iter().any(|n| n.contains("prior of the fit")));
    // The same maxima with the old period at 1.9960 ± 0.0005 d: 5.3σ away (0.0046/√(7.07e-4² + 5e-4²)),
    // the prior is dropped and said, and the fit is the maxima's alone.
    let stale = Ephemeris::new(Some(1.996), Some(2_461_000.0), Some(0.0005)).unwrap();
    let v = update_ephemeris(&stale, &maxima).unwrap();
    assert!(!v.prior_used);
    assert!((v.new.period_d - 2.0006).abs() < 1e-9, "{}", v.new.period_d);
    assert!((v.new.period_err_d - 7.0711e-4).abs() < 1e-8);
    assert!(
        v.notes.iter().any(|n| n.contains("not used as a prior")),
        "{:?}",
        v.notes
    );
}

#[test]
fn the_ephemeris_from_times_of_maximum_matches_numpy() {
    // tests/reference/oc_fixtures.json: invented maxima (BJD_TDB, errors) and
    // numpy's weighted least squares (np.linalg.lstsq on the whitened
    // system, covariance (AᵀWA)⁻¹) of T = E + P (n − n0).
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/oc_fixtures.json"
    );
    let fx: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    for case in fx["cases"].as_array().unwrap() {
        let old = Ephemeris::new(
            Some(case["old_period_d"].as_f64().unwrap()),
            Some(case["old_epoch_bjd"].as_f64().unwrap()),
            Some(case["old_period_err_d"].as_f64().unwrap()),
        )
        .unwrap();
        let maxima: Vec<Maximum> = case["maxima"]
            .as_array()
            .unwrap()
            .iter()
            .map(|m| Maximum {
                bjd: m[0].as_f64().unwrap(),
                err_d: m[1].as_f64(),
            })
            .collect();
        let u = update_ephemeris(&old, &maxima).unwrap();
        let w = &case["numpy"];
        let name = case["name"].as_str().unwrap();
        assert_eq!(u.prior_used, case["prior"].as_bool().unwrap(), "{name}");
        assert_eq!(
            u.points.iter().map(|x| x.cycle).collect::<Vec<_>>(),
            case["cycles"]
                .as_array()
                .unwrap()
                .iter()
                .map(|c| c.as_i64().unwrap())
                .collect::<Vec<_>>(),
            "{name}"
        );
        assert!(
            (u.new.period_d - w["period_d"].as_f64().unwrap()).abs() < 1e-9,
            "{name}: P {}",
            u.new.period_d
        );
        assert!(
            (u.new.epoch_max_bjd - w["epoch_bjd"].as_f64().unwrap()).abs() < 1e-7,
            "{name}: E {}",
            u.new.epoch_max_bjd
        );
        let rel = |a: f64, b: f64| (a / b - 1.0).abs();
        assert!(
            rel(u.new.period_err_d, w["period_err_d"].as_f64().unwrap()) < 1e-6,
            "{name}: σP {}",
            u.new.period_err_d
        );
        assert!(
            rel(u.new.epoch_err_d, w["epoch_err_d"].as_f64().unwrap()) < 1e-6,
            "{name}: σE {}",
            u.new.epoch_err_d
        );
        assert!(
            (u.new.epoch_period_cov_d2 - w["cov_d2"].as_f64().unwrap()).abs()
                < 1e-12 + 1e-6 * w["cov_d2"].as_f64().unwrap().abs(),
            "{name}: cov"
        );
    }
}

#[test]
fn an_ambiguous_cycle_count_is_refused() {
    let old = Ephemeris::new(Some(2.0), Some(2_461_000.0), Some(0.001)).unwrap();
    // A maximum 0.4 cycle from any predicted one.
    let e = update_ephemeris(
        &old,
        &[
            Maximum {
                bjd: 2_461_000.01,
                err_d: Some(0.01),
            },
            Maximum {
                bjd: 2_461_010.8,
                err_d: Some(0.01),
            },
            Maximum {
                bjd: 2_461_020.0,
                err_d: Some(0.01),
            },
        ],
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("cycle count is ambiguous"), "{e}");
}

fn rung(args: &[&str]) -> (i32, String, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .env("RUNG_CONFIG_DIR", env!("CARGO_TARGET_TMPDIR"))
        .output()
        .expect("run rung");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// A candidate with only a period range: `rung phase --period-range` plans
/// its search without a period or an epoch (docs/science.md, Finding a period).
#[test]
fn a_candidate_gets_its_period_search_on_the_command_line() {
    let (code, out, err) = rung(&[
        "phase",
        "--ra",
        "03:11:36",
        "--dec",
        "-03:18:00",
        "--period-range",
        "0.3,5",
        "--from",
        "2026-12-01",
        "--nights",
        "30",
        "--json",
    ]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["candidate"], true);
    let d = &v["discovery"];
    assert_eq!(d["bjd_tdb"].as_array().unwrap().len(), 24);
    assert_eq!(d["alias_free"], true, "{d}");
    assert_eq!(d["recovered"], d["trials"]);
    assert!(d["alias_peaks"][0]["true_peak"].as_bool().unwrap());
    assert!(
        d["period_err_at_max_d"].as_f64().unwrap() > d["period_err_at_min_d"].as_f64().unwrap()
    );
    // No amplitude given: the assumed one is said.
    assert!(
        v["notes"]
            .as_array()
            .unwrap()
            .iter()
            .any(|n| n.as_str().unwrap().contains("amplitude_mag not given"))
    );
    let (code, out, err) = rung(&[
        "phase",
        "--ra",
        "03:11:36",
        "--dec",
        "-03:18:00",
        "--period-range",
        "0.3,5",
        "--from",
        "2026-12-01",
        "--nights",
        "30",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains("Period search 0.30000–5.00000 d: 24 observations"),
        "{out}"
    );
    assert!(out.contains("alias-free: yes"), "{out}");
}

/// Times of maximum on the command line refit the ephemeris the phases use;
/// the JSON carries the fit, its residuals and its progress
/// (docs/bad-input.md L8, L9).
#[test]
fn maxima_refit_the_ephemeris_on_the_command_line() {
    let base = [
        "phase",
        "--ra",
        "03:11:36",
        "--dec",
        "-03:18:00",
        "--period-d",
        "9.87",
        "--epoch-max-bjd",
        "2461003.1808",
        "--period-err-d",
        "0.0002",
        "--from",
        "2026-12-01",
        "--nights",
        "10",
    ];
    let mut a = base.to_vec();
    let maxima = "2461032.7736:0.02 2461170.9892:0.02 2461289.4895:0.03 2461408.0088:0.015";
    a.extend(["--maxima", maxima, "--json"]);
    let (code, out, err) = rung(&a);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let u = &v["ephemeris_update"];
    assert_eq!(u["points"].as_array().unwrap().len(), 4);
    assert_eq!(u["progress"].as_array().unwrap().len(), 3);
    // Each step says whether the old ephemeris was its prior; the old
    // 9.87 ± 0.0002 d is far from these maxima's 9.8746 d, so the full fit
    // dropped it and says so.
    assert_eq!(u["prior_used"], false);
    assert!(
        u["progress"]
            .as_array()
            .unwrap()
            .iter()
            .all(|p| p["prior_used"].is_boolean())
    );
    assert!(
        u["notes"]
            .as_array()
            .unwrap()
            .iter()
            .any(|n| n.as_str().unwrap().contains("not used as a prior"))
    );
    // The refitted period stands in for the target's everywhere.
    assert_eq!(v["period_d"], u["new"]["period_d"]);
    // Near the slope from the first to the last maximum, (2461408.0088 −
    // 2461032.7736)/38 = 9.87461 d (by hand), well away from the old 9.87.
    let p = v["period_d"].as_f64().unwrap();
    assert!((p - 9.87461).abs() < 0.001, "{p}");
    assert!(u["new"]["period_err_d"].as_f64().unwrap() < 0.001);
    assert!(v["epoch_err_d"].as_f64().unwrap() > 0.0);
    // Bad lists are refused word for word.
    let mut a = base.to_vec();
    a.extend(["--maxima", "2461032.77 2461170.99:0.02"]);
    let (code, _, err) = rung(&a);
    assert_eq!(code, 2);
    assert_eq!(
        err.trim(),
        "rung: error: invalid --maxima: give an error (BJD:err_d) for every time of maximum, or for none"
    );
    let mut a = base.to_vec();
    a.extend(["--maxima", "61032.77"]);
    let (code, _, err) = rung(&a);
    assert_eq!(code, 2);
    assert_eq!(
        err.trim(),
        "rung: error: invalid --maxima: '61032.77' is not a full BJD_TDB such as 2461003.185 (optionally :error_d)"
    );
    let mut a = base.to_vec();
    a.extend(["--period-range", "5,0.3"]);
    let (code, _, err) = rung(&a);
    assert_eq!(code, 2);
    assert_eq!(
        err.trim(),
        "rung: error: invalid --period-range: the shortest period 5 d must be below the longest 0.3 d"
    );
}

/// A targets file's `maxima_bjd`: a bad list refuses its row with file,
/// line and field, and the good rows load (docs/bad-input.md L10).
#[test]
fn a_bad_maxima_column_refuses_its_row() {
    let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("maxima-col");
    std::fs::create_dir_all(&dir).unwrap();
    let f = dir.join("t.csv");
    std::fs::write(
        &f,
        "name,kind,ra,dec,period_d,epoch_max_bjd,mean_mag,maxima_bjd\n\
         GOOD,pulsator,47.9,-3.3,9.87,2461003.1808,12.4,2461032.7736 2461170.9892 2461289.4895\n\
         BAD,pulsator,47.9,-3.3,9.87,2461003.1808,12.4,2461032.7736:0\n",
    )
    .unwrap();
    let (code, out, err) = rung(&[
        "phase",
        "--targets",
        f.to_str().unwrap(),
        "--target",
        "GOOD",
        "--from",
        "2026-12-01",
        "--nights",
        "5",
        "--json",
    ]);
    // Exit 3: the output stands, some rows were refused.
    assert_eq!(code, 3, "{err}");
    assert!(
        err.contains("line 3, field 'maxima_bjd': '2461032.7736:0': the error after ':' must be days, above 0 and below 10"),
        "{err}"
    );
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["ephemeris_update"]["points"].as_array().unwrap().len(), 3);
}

/// A stale ephemeris gets a period search over P ± 3σ_P; an uncertainty
/// past 2P/9 holds the search's short end at P/3
/// (`SHORTEST_SEARCH_FRACTION`): a 5.05-day star with σ_P = 2 d used to be
/// searched down to 0.01 d, about 20 s of work for one `rung phase`. A
/// smaller uncertainty keeps P − 3σ_P. The expected ends are the rule
/// itself, worked out here: P ± 3σ_P is common practice for a search
/// around a catalogued period, the P/3 floor this project's own choice
/// (docs/science.md, Finding a period); no outside value.
#[test]
fn a_stale_ephemeris_search_reaches_down_to_a_third_of_the_period() {
    let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("stale-search");
    std::fs::create_dir_all(&dir).unwrap();
    let f = dir.join("t.csv");
    std::fs::write(
        &f,
        "name,kind,ra,dec,period_d,epoch_max_bjd,period_err_d,mean_mag\n\
         WIDE,pulsator,47.9,-3.3,5.05,2461005.017,2.0,10.4\n\
         NARROW,pulsator,47.9,-3.3,5.05,2451005.017,0.05,10.4\n",
    )
    .unwrap();
    let search = |name: &str| {
        let (code, out, err) = rung(&[
            "phase",
            "--targets",
            f.to_str().unwrap(),
            "--target",
            name,
            "--from",
            "2026-12-01",
            "--nights",
            "60",
            "--json",
        ]);
        assert_eq!(code, 0, "{err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        let d = &v["discovery"];
        let note = v["notes"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|n| n.as_str())
            .find(|n| n.contains("a period search over"))
            .unwrap_or_default()
            .to_string();
        (
            d["period_min_d"].as_f64().unwrap(),
            d["period_max_d"].as_f64().unwrap(),
            note,
        )
    };
    let (lo, hi, note) = search("WIDE");
    assert_eq!((lo, hi), (5.05 * (1.0 / 3.0), 5.05 + 3.0 * 2.0));
    assert!(
        note.contains("(P ± 3σ_P, its short end held at P/3)"),
        "{note}"
    );
    let (lo, hi, note) = search("NARROW");
    assert_eq!((lo, hi), (5.05 - 3.0 * 0.05, 5.05 + 3.0 * 0.05));
    assert!(note.contains("(P ± 3σ_P)"), "{note}");
}
