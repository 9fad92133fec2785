//! Season-scan throughput: 10 000 targets × 365 nights through the library
//! (`rung::plan::season::scan`), plus its two parts (one night prepared, one
//! night of 10 000 targets). Run with `cargo bench --bench season`.
//!
//! Targets are spread uniformly over the sphere with a fixed pseudo-random
//! sequence (invented positions), seen from the invented demo site, with
//! altitude ≥ 30°, Sun < −18°, Moon ≥ 30°.
//!
//! Measured 2026-12-02 on the shared 2-core AMD EPYC virtual machine while
//! other builds ran (load average 4–6, so wall times are inflated):
//! - prepare one night: 2.6–3.5 ms (single thread);
//! - 10 000 targets × 1 night: 6.4–6.8 ms (2 threads);
//! - 10 000 targets × 365 nights: 3.9–4.1 s wall under that load.
//!
//! The command-line run behind these numbers (`rung season ... --csv >
//! /dev/null`, 3.65 million rows, 392 MB of CSV) took 2.9–3.7 s wall when it
//! got 84–98 % of one core's worth of CPU, 2.9–3.1 s of CPU time in all
//! (user + system), peak resident memory 17.3 MB (`/usr/bin/time -v`).

use chrono::NaiveDate;
use criterion::{Criterion, criterion_group, criterion_main};
use rung::astro::frames::CatalogPlace;
use rung::plan::season::{self, Constraints, NightSky, PreparedPlace, ScanSetup};
use std::hint::black_box;
use std::ops::ControlFlow;

fn places(n: usize) -> Vec<CatalogPlace> {
    let mut x: u64 = 0x2545_F491_4F6C_DD1D;
    let mut next = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|_| {
            let ra = 360.0 * next();
            let dec = (2.0 * next() - 1.0).asin().to_degrees();
            CatalogPlace::fixed_deg(ra, dec)
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let cons = Constraints::new(30.0, -18.0, Some(30.0)).unwrap();
    let from = NaiveDate::from_ymd_opt(2026, 1, 1).unwrap();
    let to = NaiveDate::from_ymd_opt(2026, 12, 31).unwrap();
    let ps = places(10_000);

    let mut g = c.benchmark_group("season");
    g.sample_size(10);
    g.bench_function("prepare one night", |b| {
        b.iter(|| NightSky::new(&site, black_box(from), &cons).unwrap())
    });
    let sky = NightSky::new(&site, from, &cons).unwrap();
    let setup = ScanSetup::new(&site, &cons, &sky);
    let prepared: Vec<PreparedPlace> = ps.iter().map(PreparedPlace::new).collect();
    let mut rows = Vec::new();
    g.bench_function("10000 targets x 1 night", |b| {
        b.iter(|| {
            season::scan_night(&setup, &sky, &prepared, &mut rows);
            black_box(rows.len())
        })
    });
    g.bench_function("10000 targets x 365 nights", |b| {
        b.iter(|| {
            let mut hours = 0.0;
            season::scan(&site, &ps, from, to, &cons, |nr| {
                hours += nr.rows.iter().map(|r| r.observable_hours).sum::<f64>();
                ControlFlow::Continue(())
            })
            .unwrap();
            black_box(hours)
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
