//! The weather model of the budget (docs/science.md, Weather and allocation):
//! nights clear with probability f, a lost night repeated until clear.
//! Expected hours scale as 1/f; the pessimistic quantile is checked against
//! scipy's negative binomial (tests/reference/make_budget_weather_fixtures.py)
//! and, for several months together, against a simulation.

mod rng_support;

use rng_support::XorShift;
use rung::plan::budget::weather::{
    HoursDistribution, NightLoad, expected_hours, nights_quantile, quantile_hours,
};

#[derive(serde::Deserialize)]
struct Case {
    k: u32,
    f: f64,
    q: f64,
    nights_quantile: u32,
    nights_mean: f64,
    tie: bool,
}

#[derive(serde::Deserialize)]
struct Fixture {
    cases: Vec<Case>,
}

fn fixture() -> Fixture {
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/budget_weather_fixtures.json"
    );
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

#[test]
fn nights_quantile_matches_scipy_negative_binomial() {
    // scipy.stats.nbinom(k, f).ppf(q) + k, from the fixture script.
    for c in fixture().cases {
        let ours = nights_quantile(c.k, c.f, c.q);
        // At an exact tie (the CDF one night earlier equals q) either is right.
        let ok = ours == c.nights_quantile || (c.tie && ours + 1 == c.nights_quantile);
        assert!(
            ok,
            "k {} f {} q {}: {ours} vs scipy {}",
            c.k, c.f, c.q, c.nights_quantile
        );
        // One month of k nights of 0.8 h each: the hours are 0.8 × that quantile.
        let loads: Vec<NightLoad> = (0..c.k)
            .map(|_| NightLoad {
                month: 5,
                hours: 0.8,
            })
            .collect();
        let mut clear = [1.0; 12];
        clear[4] = c.f;
        let q = quantile_hours(&loads, &clear, c.q);
        assert!((q - 0.8 * ours as f64).abs() < 1e-9, "{q}");
        // And the mean is k/f nights.
        let e = expected_hours(&loads, &clear);
        assert!((e - 0.8 * c.nights_mean).abs() < 1e-9);
    }
}

#[test]
fn expected_hours_scale_as_one_over_the_clear_fraction() {
    let loads: Vec<NightLoad> = (0..40)
        .map(|i| NightLoad {
            month: 1 + (i % 12),
            hours: 0.1 + 0.05 * (i % 7) as f64,
        })
        .collect();
    let clear_h: f64 = loads.iter().map(|l| l.hours).sum();
    for f in [1.0, 0.9, 0.7, 0.5, 0.25] {
        let e = expected_hours(&loads, &[f; 12]);
        assert!(
            (e - clear_h / f).abs() < 1e-9,
            "f {f}: {e} vs {}",
            clear_h / f
        );
    }
}

#[test]
fn several_months_together_match_a_simulation() {
    // Nights in four months of different clear fractions and loads; each
    // night is tried until it is clear (the model), 200,000 seasons simulated.
    let mut clear = [0.8; 12];
    clear[0] = 0.5;
    clear[5] = 0.7;
    clear[8] = 0.9;
    let mut loads = Vec::new();
    for (month, n, h) in [(1u32, 6, 0.5), (6, 10, 0.3), (9, 8, 1.2), (11, 5, 0.2)] {
        for _ in 0..n {
            loads.push(NightLoad { month, hours: h });
        }
    }
    let d = HoursDistribution::new(&loads, &clear);
    let mut rng = XorShift(0x1234_5678_9abc_def1);
    let mut sims: Vec<f64> = (0..200_000)
        .map(|_| {
            loads
                .iter()
                .map(|l| {
                    let f = clear[(l.month - 1) as usize];
                    let mut tries = 1.0;
                    while rng.unit() >= f {
                        tries += 1.0;
                    }
                    tries * l.hours
                })
                .sum::<f64>()
        })
        .collect();
    sims.sort_by(f64::total_cmp);
    let mean_sim = sims.iter().sum::<f64>() / sims.len() as f64;
    assert!(
        (mean_sim - expected_hours(&loads, &clear)).abs() < 0.02,
        "{mean_sim}"
    );
    for q in [0.5, 0.9, 0.95] {
        let sim = sims[(q * sims.len() as f64) as usize];
        let ours = d.quantile(q);
        // The grid is 1/1000 of the weather's mean extra hours; the simulated
        // quantile's own scatter is a few hundredths of an hour here.
        assert!(
            (ours - sim).abs() < 0.12,
            "q {q}: {ours} vs simulated {sim}"
        );
        let p = d.probability_within(sim);
        assert!(
            (p - q).abs() < 0.02,
            "P(within {sim}) = {p}, want about {q}"
        );
    }
}
