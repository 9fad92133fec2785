//! The scheduler at the telescope (#21), on the demo programme
//! (`targets-demo/`, 26 targets) and on the synthetic invented programme of
//! 1,000 targets (`support/synthetic.rs`), with the demo site and instrument
//! and an empty user config folder:
//!
//! - `rung plan` over two weeks at 8 h a night (the README's example):
//!   `plan::schedule::schedule`;
//! - the re-plan an observer asks for in the night (`rung plan --load
//!   --replan`, the Next view's `R`): the same request with the plan's first
//!   night's visits before 01:00 UTC done, the second night lost and nothing
//!   placed before the clock;
//! - `rung next`: the queue at 2026-12-02 01:00 UTC with that plan,
//!   `plan::now::queue`.
//!
//! `rung plan` over 6 months at 26, 1,000 and 10,000 targets is in
//! `benches/programme.rs`; `python3 benches/side_by_side.py --programme`
//! times the command line of these jobs too.
//!
//! Run: `cargo bench --bench schedule -- --warm-up-time 1`.

#[path = "support/synthetic.rs"]
mod synthetic;

use criterion::{Criterion, criterion_group, criterion_main};
use rung::astro::time::parse_instant;
use rung::io::targets::Target;
use rung::plan::schedule::{Request, Status, Visit, schedule};
use rung::programme::{Choices, Settings};
use std::hint::black_box;

fn settings(programme: Option<std::path::PathBuf>) -> Settings {
    let now = parse_instant("2026-12-02T01:00:00Z").unwrap();
    let req = rung::programme::Request {
        cli: Choices {
            from: Some("2026-12-01".into()),
            to: Some("2026-12-14".into()),
            ..Default::default()
        },
        programme,
        ..Default::default()
    };
    Settings::resolve(&req, now).expect("settings")
}

fn bench(c: &mut Criterion) {
    let cfg = std::env::temp_dir().join(format!("rung-bench-cfg-{}", std::process::id()));
    std::fs::create_dir_all(&cfg).unwrap();
    // SAFETY: set before criterion or rayon start any thread.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", &cfg) };
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let demo_targets = rung::io::targets::load(&demo).unwrap().targets;
    let cases: Vec<(String, Settings, Vec<Target>)> = vec![
        ("demo".into(), settings(Some(demo.clone())), demo_targets),
        (
            "1000 targets".into(),
            settings(None),
            synthetic::targets(1_000),
        ),
    ];
    let clock = parse_instant("2026-12-02T01:00:00Z").unwrap();
    let lost: chrono::NaiveDate = "2026-12-02".parse().unwrap();

    let mut g = c.benchmark_group("plan two weeks 8 h a night");
    g.sample_size(10);
    for (name, st, t) in &cases {
        g.bench_function(name.as_str(), |b| {
            b.iter(|| black_box(schedule(&Request::programme(st, t, 8.0)).unwrap()))
        });
    }
    g.finish();

    let mut g = c.benchmark_group("re-plan in the night");
    g.sample_size(10);
    for (name, st, t) in &cases {
        let first = schedule(&Request::programme(st, t, 8.0)).unwrap();
        let done: Vec<Visit> = first
            .visits
            .iter()
            .filter(|v| v.end <= clock)
            .map(|v| Visit {
                status: Status::Done,
                ..v.clone()
            })
            .collect();
        g.bench_function(name.as_str(), |b| {
            b.iter(|| {
                let mut r = Request::programme(st, t, 8.0);
                r.done = done.clone();
                r.lost_nights.insert(lost);
                r.not_before = Some(clock);
                black_box(schedule(&r).unwrap())
            })
        });
    }
    g.finish();

    let mut g = c.benchmark_group("next (the queue now)");
    g.sample_size(10);
    for (name, st, t) in &cases {
        let s = schedule(&Request::programme(st, t, 8.0)).unwrap();
        let plan = rung::plan::file::PlanFile::new(st, t, "bench.csv".into(), 8.0, s.visits);
        g.bench_function(name.as_str(), |b| {
            b.iter(|| black_box(rung::plan::now::queue(st, t, Some(&plan), clock).unwrap()))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
