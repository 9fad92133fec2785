//! Programme-scale jobs (#20), each at 26, 1,000 and 10,000 synthetic
//! invented targets (`support/synthetic.rs`), with the demo site and
//! instrument and an empty user config folder:
//!
//! - `rung budget` over 18 months (2026-12-01 to 2028-05-31): `plan::budget::budget`;
//! - `rung plan` over 6 months at 8 h a night, its methods planning to the
//!   programme's last night as the command line's do (2029-11-30: a
//!   programme without its own range runs 36 months from its first night,
//!   and `--to` makes the plan a slice of it, `plan::schedule::slice_horizon`):
//!   `plan::schedule::schedule`;
//! - `rung night --targets` for 2026-12-01: the night, its events, one
//!   `plan::night_table` row per target and its sky brightness, as
//!   src/cli/night.rs computes them;
//! - the terminal UI's first full Roster: the state opened, the night table
//!   of every target computed (the runner starts it before the budget) and
//!   the screen drawn at 80×24;
//! - the UI's next night: `→`, the new night's table, the redraw;
//! - the UI's cold budget wait (the Roster's σd/d·goal column over the
//!   budget's 18 months, the UI's memo of predictions cleared before each
//!   sample through `effects::clear_budget_memo`): until the rows on screen
//!   at 80×24 show their figures (the budget job streams them, those rows
//!   first), and until the whole budget is in (every row);
//! - a key that needs no computation (`↓` in the Roster, a letter typed in
//!   the filter): the update and the redraw, what stands between a key and a
//!   redrawn screen (aim: 50 ms).
//!
//! Budget and plan at 10,000 targets take tens of seconds an iteration; they
//! run only with `RUNG_BENCH_LARGE=1` (criterion needs ten samples), and
//! `python3 benches/side_by_side.py --programme` times the command line once
//! at every size instead. Nights are cached in the process (`Night::shared`),
//! so after the first iteration criterion measures budget and plan with the
//! nights built; the command line builds them in every run.
//!
//! Run: `cargo bench --bench programme -- --warm-up-time 1`
//! (one group: `cargo bench --bench programme -- budget`).

#[path = "support/synthetic.rs"]
mod synthetic;

use criterion::{BatchSize, Criterion, criterion_group, criterion_main};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use rayon::prelude::*;
use rung::astro::night::Night;
use rung::astro::time::parse_instant;
use rung::io::targets::Target;
use rung::programme::{Choices, Request, Settings};
use rung::tui::effects::{Cancel, budget_streaming, clear_budget_memo, run};
use rung::tui::state::Progress;
use rung::tui::state::{Programme, State};
use rung::tui::theme::Theme;
use rung::tui::{Action, Effect, Msg, Setup, draw, init, update};
use std::hint::black_box;

const SIZES: [usize; 3] = [26, 1_000, 10_000];

fn large() -> bool {
    std::env::var_os("RUNG_BENCH_LARGE").is_some()
}

/// The demo site and instrument over `from`..`to` (no `to`: the programme's
/// own 36 months), nothing from the user's folder.
fn settings(from: &str, to: Option<&str>) -> Settings {
    let now = parse_instant("2026-12-02T01:00:00Z").unwrap();
    let req = Request {
        cli: Choices {
            from: Some(from.into()),
            to: to.map(Into::into),
            ..Default::default()
        },
        ..Default::default()
    };
    Settings::resolve(&req, now).expect("settings")
}

fn setup(targets: Vec<Target>, settings: &Settings) -> Setup {
    Setup {
        sites: rung::io::sites::catalogue().unwrap(),
        settings: settings.clone(),
        date: Some(chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()),
        now: parse_instant("2026-12-02T01:00:00Z").unwrap(),
        targets,
        programme: Programme {
            source: None,
            save_path: "/nonexistent/bench.csv".into(),
            is_demo: true,
            refused_rows: 0,
            original: None,
            layout: None,
            disk: None,
            instance: None,
        },
        size: (80, 24),
        theme: Theme { color: true },
        message: None,
        instruments: vec![rung::photometry::instrument::DEMO_INSTRUMENT.to_string()],
        recovered: None,
    }
}

/// The night-table job of an effect (the runner starts it first), if any.
fn night_job(e: Effect) -> Option<Effect> {
    match e {
        e @ Effect::Night(_) => Some(e),
        Effect::Batch(list) => list.into_iter().find_map(night_job),
        _ => None,
    }
}

/// Apply a message and the night table it asks for (nothing else), as the
/// runner does before the budget.
fn apply_night(s: &mut State, m: Msg) {
    if let Some(e) = update(s, m).and_then(night_job) {
        for m in run(e) {
            update(s, m);
        }
    }
}

fn frame(s: &State, term: &mut Terminal<TestBackend>) {
    term.draw(|f| draw(s, f)).unwrap();
}

fn bench(c: &mut Criterion) {
    // An empty user config folder: the built-in catalogues and methods only.
    let cfg = std::env::temp_dir().join(format!("rung-bench-cfg-{}", std::process::id()));
    std::fs::create_dir_all(&cfg).unwrap();
    // SAFETY: set before criterion or rayon start any thread.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", &cfg) };
    let budget_st = settings("2026-12-01", Some("2028-05-31"));
    let plan_st = settings("2026-12-01", Some("2027-05-31"));
    // Where `rung plan --to 2027-05-31` has its methods plan to: the
    // programme's own last night (no --to) as a slice's horizon.
    let horizon_to = rung::plan::schedule::slice_horizon(&plan_st, settings("2026-12-01", None).to);
    let date = chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap();
    let programmes: Vec<(usize, Vec<Target>)> =
        SIZES.iter().map(|&n| (n, synthetic::targets(n))).collect();

    let mut g = c.benchmark_group("budget 18 months");
    g.sample_size(10);
    for (n, t) in &programmes {
        if *n > 1_000 && !large() {
            continue;
        }
        g.bench_function(format!("{n} targets"), |b| {
            b.iter(|| black_box(rung::plan::budget::budget(&budget_st, t).unwrap()))
        });
    }
    g.finish();

    let mut g = c.benchmark_group("plan 6 months 8 h a night");
    g.sample_size(10);
    for (n, t) in &programmes {
        if *n > 1_000 && !large() {
            continue;
        }
        g.bench_function(format!("{n} targets"), |b| {
            b.iter(|| {
                let mut req = rung::plan::schedule::Request::programme(&plan_st, t, 8.0);
                req.horizon_to = horizon_to;
                black_box(rung::plan::schedule::schedule(&req).unwrap())
            })
        });
    }
    g.finish();

    let mut g = c.benchmark_group("night --targets");
    g.sample_size(10);
    for (n, t) in &programmes {
        let places: Vec<_> = t.iter().map(|t| t.place()).collect();
        let bands = &budget_st.photometer.bands;
        g.bench_function(format!("{n} targets"), |b| {
            b.iter(|| {
                let night = Night::new(&budget_st.site, date).unwrap();
                let events = night.events();
                let rows = rung::plan::night_table::rows(&night, &places, &budget_st.limits);
                let sky: Vec<_> = rows
                    .par_iter()
                    .zip(t)
                    .map(|(r, t)| r.sky_brightness(bands, &t.band).and_then(|x| x.ok()))
                    .collect();
                black_box((events, rows, sky))
            })
        });
    }
    g.finish();

    let mut g = c.benchmark_group("UI budget, cold");
    g.sample_size(10);
    for (n, t) in &programmes {
        if *n > 1_000 {
            continue;
        }
        // The state with its night table, the Roster shown; the memo cleared.
        let ready = || {
            let (mut s, e) = init(setup(t.clone(), &budget_st));
            if let Some(e) = e.and_then(night_job) {
                for m in run(e) {
                    update(&mut s, m);
                }
            }
            clear_budget_memo();
            s
        };
        let in_sight = |s: &State| {
            let rows = (24 - rung::tui::state::CHROME_ROWS - 2) as usize;
            s.order
                .iter()
                .take(rows)
                .all(|&i| !matches!(s.progress(&s.targets[i]), Progress::Pending { .. }))
        };
        g.bench_function(format!("rows on screen, {n} targets"), |b| {
            b.iter_batched(
                ready,
                |mut s| {
                    let k = s.budget_key();
                    let stop = Cancel::default();
                    let _ = budget_streaming(&k, &stop, &mut |m| {
                        update(&mut s, m);
                        if in_sight(&s) {
                            stop.cancel();
                        }
                    });
                    assert!(in_sight(&s));
                    s
                },
                BatchSize::PerIteration,
            )
        });
        g.bench_function(format!("every row, {n} targets"), |b| {
            b.iter_batched(
                ready,
                |mut s| {
                    let k = s.budget_key();
                    for m in run(Effect::Budget(Box::new(k))) {
                        update(&mut s, m);
                    }
                    assert!(s.budget_now().is_some());
                    s
                },
                BatchSize::PerIteration,
            )
        });
    }
    g.finish();

    let mut g = c.benchmark_group("UI");
    g.sample_size(10);
    for (n, t) in &programmes {
        let mut term = Terminal::new(TestBackend::new(80, 24)).unwrap();
        g.bench_function(format!("first full Roster, {n} targets"), |b| {
            b.iter_batched(
                || setup(t.clone(), &budget_st),
                |su| {
                    let (mut s, e) = init(su);
                    if let Some(e) = e.and_then(night_job) {
                        for m in run(e) {
                            update(&mut s, m);
                        }
                    }
                    assert!(s.night.is_some());
                    frame(&s, &mut term);
                    s
                },
                BatchSize::PerIteration,
            )
        });
        let (mut s, e) = init(setup(t.clone(), &budget_st));
        if let Some(e) = e.and_then(night_job) {
            for m in run(e) {
                update(&mut s, m);
            }
        }
        g.bench_function(format!("next night, {n} targets"), |b| {
            b.iter(|| {
                apply_night(&mut s, Msg::Act(Action::NightFwd));
                frame(&s, &mut term);
            })
        });
        g.bench_function(format!("key ↓ and redraw, {n} targets"), |b| {
            b.iter(|| {
                apply_night(&mut s, Msg::Act(Action::Down));
                frame(&s, &mut term);
            })
        });
        apply_night(&mut s, Msg::Act(Action::Filter));
        g.bench_function(format!("filter letter and redraw, {n} targets"), |b| {
            b.iter(|| {
                apply_night(
                    &mut s,
                    Msg::Key(crossterm::event::KeyEvent::new(
                        crossterm::event::KeyCode::Char('S'),
                        crossterm::event::KeyModifiers::NONE,
                    )),
                );
                apply_night(
                    &mut s,
                    Msg::Key(crossterm::event::KeyEvent::new(
                        crossterm::event::KeyCode::Backspace,
                        crossterm::event::KeyModifiers::NONE,
                    )),
                );
                frame(&s, &mut term);
            })
        });
    }
    g.finish();
    let _ = std::fs::remove_dir_all(&cfg);
}

criterion_group!(benches, bench);
criterion_main!(benches);
