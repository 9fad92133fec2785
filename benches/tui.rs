//! Redraw time of the Roster and Season views (and Tonight) for a programme of
//! 1,000 invented targets, into ratatui's TestBackend. Aim: well under 16 ms a frame.
//! Everything the views show is computed before timing starts, as in the app
//! (the library fills the state's caches off the draw path).

use criterion::{Criterion, criterion_group, criterion_main};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use rung::astro::time::parse_instant;
use rung::io::sites;
use rung::io::targets::{Kind, Target};
use rung::tui::effects::{open, settle};
use rung::tui::state::{Programme, State};
use rung::tui::theme::Theme;
use rung::tui::{Action, Msg, Setup, draw};

fn programme(n: usize) -> Vec<Target> {
    (0..n)
        .map(|i| {
            let ra = (i as f64 * 137.508) % 360.0;
            let dec = -85.0 + (i as f64 * 61.8) % 150.0;
            let mut t = Target::plain(&format!("BENCH-{i:04}"), ra, dec);
            if i % 3 == 0 {
                t.kind = Kind::Parallax;
                t.parallax_mas = Some(20.0 + (i % 50) as f64);
                t.goal_pct = Some(3.0);
            }
            t.notes = "invented bench target".into();
            t
        })
        .collect()
}

fn state(size: (u16, u16)) -> State {
    let now = parse_instant("2026-12-02T01:00:00Z").unwrap();
    // The demo site and instrument over twelve months.
    let req = rung::programme::Request {
        cli: rung::programme::Choices {
            from: Some("2026-12-01".into()),
            to: Some("2027-11-30".into()),
            ..Default::default()
        },
        ..Default::default()
    };
    open(Setup {
        sites: sites::catalogue().unwrap(),
        settings: rung::programme::Settings::resolve(&req, now).unwrap(),
        date: Some(chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()),
        now,
        targets: programme(1000),
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
        size,
        theme: Theme { color: true },
        message: None,
        instruments: vec![rung::photometry::instrument::DEMO_INSTRUMENT.to_string()],
        recovered: None,
    })
}

fn bench(c: &mut Criterion) {
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let mut s = state((w, h));
        assert_eq!(s.targets.len(), 1000);
        // Move the selection half-way down so the list scrolls.
        for _ in 0..500 {
            settle(&mut s, Msg::Act(Action::Down));
        }
        let mut term = Terminal::new(TestBackend::new(w, h)).unwrap();
        c.bench_function(&format!("roster_1000_targets_{w}x{h}"), |b| {
            b.iter(|| {
                term.draw(|f| draw(&s, f)).unwrap();
            })
        });
        settle(&mut s, Msg::Act(Action::ShowTonight));
        c.bench_function(&format!("tonight_1000_targets_{w}x{h}"), |b| {
            b.iter(|| {
                term.draw(|f| draw(&s, f)).unwrap();
            })
        });
        settle(&mut s, Msg::Act(Action::ShowSeason));
        assert!(s.season.hours.contains_key(&s.selected().unwrap().name));
        c.bench_function(&format!("season_1000_targets_{w}x{h}"), |b| {
            b.iter(|| {
                term.draw(|f| draw(&s, f)).unwrap();
            })
        });
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
