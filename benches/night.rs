//! What `rung night` computes: the night's Sun and Moon events and, for every
//! target, rise, transit, set and the observable window (targets in parallel
//! with rayon, as src/cli/night.rs does). For the demo programme and for a
//! generated list of 10 000 targets spread evenly over the sky.
//!
//! Run: `cargo bench --bench night -- --warm-up-time 1 --measurement-time 5`.

use criterion::{Criterion, criterion_group, criterion_main};
use rayon::prelude::*;
use rung::astro::frames::CatalogPlace;
use rung::astro::night::{Limits, Night, NightEvents, TargetNight};
use rung::astro::site::Site;
use std::hint::black_box;

fn night_for(
    site: &Site,
    date: chrono::NaiveDate,
    places: &[CatalogPlace],
    limits: &Limits,
) -> (NightEvents, Vec<TargetNight>) {
    let night = Night::new(site, date).expect("night");
    let events = night.events();
    let rows = places.par_iter().map(|p| night.target(p, limits)).collect();
    (events, rows)
}

/// 10 000 places on a Fibonacci lattice (even coverage of the sphere), with
/// every fourth given proper motion and parallax like a nearby star.
fn generated_places(n: usize) -> Vec<CatalogPlace> {
    let golden = std::f64::consts::PI * (3.0 - 5f64.sqrt());
    (0..n)
        .map(|i| {
            let z = 1.0 - 2.0 * (i as f64 + 0.5) / n as f64;
            let mut p = CatalogPlace {
                ra_rad: (golden * i as f64).rem_euclid(std::f64::consts::TAU),
                dec_rad: z.asin(),
                ..Default::default()
            };
            if i % 4 == 0 {
                let mas = (1e-3f64 / 3600.0).to_radians();
                p.pm_ra_rad_yr = 300.0 * mas / p.dec_rad.cos().max(1e-3);
                p.pm_dec_rad_yr = -200.0 * mas;
                p.parallax_arcsec = 0.05;
            }
            p
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let site = rung::io::sites::resolve("pampa-lucero").expect("demo site");
    let date = chrono::NaiveDate::from_ymd_opt(2026, 12, 1).expect("date");
    let limits = Limits::new(30.0, -12.0).expect("limits");
    let demo_file = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");
    let demo = rung::io::targets::load(std::path::Path::new(demo_file)).expect("demo programme");
    assert!(demo.problems.is_empty(), "demo programme has bad rows");
    let demo_places: Vec<CatalogPlace> = demo.targets.iter().map(|t| t.place()).collect();
    let many = generated_places(10_000);

    let mut g = c.benchmark_group("rung night");
    g.sample_size(10);
    g.bench_function(
        format!("demo programme ({} targets)", demo_places.len()),
        |b| b.iter(|| black_box(night_for(&site, date, black_box(&demo_places), &limits))),
    );
    g.bench_function("generated 10000 targets", |b| {
        b.iter(|| black_box(night_for(&site, date, black_box(&many), &limits)))
    });
    g.bench_function("night events only (no targets)", |b| {
        b.iter(|| black_box(night_for(&site, date, &[], &limits)))
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
