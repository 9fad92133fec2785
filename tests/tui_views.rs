//! Each view rendered into ratatui's TestBackend at 80×24 and 160×48, checked
//! cell by cell against content computed here straight from the library
//! (`Night::new`, `night.target`, `night.events`), so the screen must show
//! exactly what the commands compute.

#[path = "tui_support.rs"]
mod support;

use ratatui::style::Color;
use rung::astro::night::{Limits, Night};
use rung::io::sites;
use rung::tui::Action;
use rung::tui::keymap::{KEYMAP, Scope};
use rung::tui::state::View;
use rung::tui::theme::hours_glyph;
use support::*;

fn local_hm(t: rung::astro::time::Instant) -> String {
    let site = sites::resolve("pampa-lucero").unwrap();
    t.local(&site.timezone).format("%H:%M").to_string()
}

fn demo_night() -> Night {
    let site = sites::resolve("pampa-lucero").unwrap();
    Night::new(&site, chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()).unwrap()
}

fn limits() -> Limits {
    Limits::new(30.0, -12.0).unwrap()
}

#[test]
fn roster_80x24_shows_library_windows() {
    let s = demo_state((80, 24));
    let (rows, _) = screen(&s, 80, 24);
    // Status line: site, UTC and local time (UTC−3 at the demo site), Sun, Moon.
    assert!(
        rows[0].starts_with("pampa-lucero  UTC 01:00  local 22:00  Sun "),
        "{}",
        rows[0]
    );
    assert!(rows[0].contains("Moon "), "{}", rows[0]);
    assert!(
        rows[1].contains("1 Roster")
            && rows[1].contains("7 Bud")
            && rows[1].contains(" 2026-12-01 "),
        "{}",
        rows[1]
    );
    assert!(rows[1].trim_end().ends_with("demo"), "{}", rows[1]);
    assert!(rows[2].starts_with("Roster · 71 of 71 targets · by file order"));
    assert!(rows[3].contains("name") && rows[3].contains("window") && rows[3].contains("airm"));
    // File order, with 24 − 5 = 19 rows visible (status, tabs, title, header, message).
    let night = demo_night();
    let targets = demo_targets();
    for (k, t) in targets.iter().take(19).enumerate() {
        let r = &rows[4 + k];
        assert!(r.contains(&t.name), "row {k}: {r}");
        let tn = night.target(&t.place(), &limits());
        let w = match tn.main_window() {
            Some(w) => format!("{}-{}", local_hm(w.0), local_hm(w.1)),
            None => "none".into(),
        };
        assert!(r.contains(&w), "{} window {w}: {r}", t.name);
        if let Some(x) = tn.min_airmass {
            assert!(
                r.contains(&format!("{x:.2}")),
                "{}: airmass {x:.2}: {r}",
                t.name
            );
        }
    }
    assert!(
        !has(&rows, &targets[19].name),
        "row 20 must be off screen at 24 rows"
    );
    // The last row names the demo rule: saving goes to the user's own file.
    assert!(rows[23].contains("demo programme: saving writes your own"));
}

#[test]
fn roster_160x80_has_wide_columns_and_every_target() {
    // 80 rows: the demo's 71 targets and the chrome.
    let s = demo_state((160, 80));
    let (rows, _) = screen(&s, 160, 80);
    assert!(rows[0].contains("Moon ") && rows[0].contains("waning") || rows[0].contains("waxing"));
    for col in ["trans", "RA", "Dec", "prio", "notes"] {
        assert!(rows[3].contains(col), "{col}: {}", rows[3]);
    }
    for t in demo_targets() {
        assert!(has(&rows, &t.name), "{}", t.name);
    }
    // LPO-P01 sits at 00:48:00, −31:12:00 in the demo file.
    let r = row_of(&rows, "LPO-P01");
    assert!(r.contains("00:48:00") && r.contains("-31:12:00"), "{r}");
    assert!(r.contains("nearby dwarf candidate"), "{r}");
}

#[test]
fn tonight_80x24_chart_and_events() {
    let mut s = demo_state((80, 24));
    ch(&mut s, '2');
    assert_eq!(s.view, View::Tonight);
    let (rows, buf) = screen(&s, 80, 24);
    assert!(rows[2].starts_with("Tonight · ◆ LPO-P01 parallax · night of 2026-12-01"));
    // Altitude labels on the left, limit label on the right.
    assert!(rows[3].starts_with("90°"), "{}", rows[3]);
    assert!(has(&rows, " 0°"));
    let lim = row_of(&rows, "┄┄┄┄");
    assert!(
        lim.starts_with("30°") && lim.trim_end().ends_with("30°"),
        "{lim}"
    );
    // Braille curve cells and the current-time marker.
    let braille = (0..80)
        .flat_map(|x| (3..16).map(move |y| (x, y)))
        .filter(|p| {
            buf[*p]
                .symbol()
                .chars()
                .next()
                .is_some_and(|c| ('\u{2801}'..='\u{28FF}').contains(&c))
        })
        .count();
    assert!(braille > 40, "only {braille} braille cells");
    assert!(has(&rows, "now") && has(&rows, "│"));
    // The twilight strip holds day, civil, nautical, astronomical and dark glyphs.
    let strip = rows
        .iter()
        .find(|r| r.contains("▓") && r.contains("░"))
        .unwrap();
    for g in ['█', '▓', '▒', '░'] {
        assert!(strip.contains(g), "{g} in {strip}");
    }
    // Events as the library computes them.
    let night = demo_night();
    let e = night.events();
    let sky = row_of(&rows, "Sun set");
    assert!(
        sky.contains(&format!("Sun set {}", local_hm(e.sunset.t.unwrap()))),
        "{sky}"
    );
    assert!(
        sky.contains(&format!("rise {}", local_hm(e.sunrise.t.unwrap()))),
        "{sky}"
    );
    let tn = night.target(&demo_targets()[0].place(), &limits());
    let w = tn.main_window().unwrap();
    let line = row_of(&rows, "window ");
    assert!(
        line.contains(&format!("window {}-{}", local_hm(w.0), local_hm(w.1))),
        "{line}"
    );
    let tr = row_of(&rows, "transit ");
    assert!(
        tr.contains(&format!("transit {}", local_hm(tn.transit.t.unwrap()))),
        "{tr}"
    );
    // The target's lines fit 80 columns: each ends with its last figure
    // (they were cut at "Moon 144° awa" and "priority" without its value).
    let t = &demo_targets()[0];
    assert!(line.trim_end().ends_with(" away"), "{line}");
    assert!(line.contains(" h above 30°) · best "), "{line}");
    assert!(
        tr.contains(&format!(
            " · goal {}% · pri {}",
            t.goal_pct.unwrap(),
            t.priority
        )),
        "{tr}"
    );
    // Local hour labels under the chart.
    let axis = rows
        .iter()
        .find(|r| r.contains("21") && r.contains("00") && r.contains("03"))
        .unwrap();
    assert!(
        axis.trim_start().starts_with("20") || axis.trim_start().starts_with("19"),
        "{axis}"
    );
}

#[test]
fn tonight_160x48_has_the_roster_beside_it() {
    let mut s = demo_state((160, 48));
    ch(&mut s, '2');
    let (rows, _) = screen(&s, 160, 48);
    assert!(rows[2].starts_with("Roster"), "{}", rows[2]);
    assert!(rows[2][..].contains("Tonight · ◆ LPO-P01"));
    for t in demo_targets().iter().take(20) {
        assert!(has(&rows, &format!("{} ", t.name)), "{}", t.name);
    }
    assert!(has(&rows, "90°") && has(&rows, "Sun set"));
}

#[test]
fn season_80x24_and_160x48_match_per_night_library_hours() {
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let mut s = demo_state((w, h));
        ch(&mut s, '3');
        assert_eq!(s.view, View::Season);
        let (rows, _) = screen(&s, w, h);
        assert!(
            rows[2].starts_with(
                "Season · hours above 30° with Sun below -12° · from 2026-12-01, every 7 nights"
            ),
            "{}",
            rows[2]
        );
        // Month labels at the column where each month begins (weekly columns
        // from 2026-12-01: Dec at 0, January at 5, February at 9, March at 13).
        // January has four columns, too few for "2027" and a gap, so it is "'27".
        let labels: String = rows[3].chars().skip(16).collect();
        let at = |c: usize, l: &str| {
            labels
                .chars()
                .skip(c)
                .take(l.chars().count())
                .collect::<String>()
                == l
        };
        assert!(
            at(0, "Dec") && at(5, "'27") && at(9, "Feb") && at(13, "Mar"),
            "{labels}"
        );
        assert!(labels.contains("Jun"), "{labels}");
        let shown = (h - 6) as usize;
        let targets = demo_targets();
        for t in targets.iter().take(shown.min(targets.len())) {
            assert!(has(&rows, &format!(" {}", t.name)), "{}", t.name);
        }
        // Every shown column of every shown target against the season engine
        // (`rung::plan::season::scan`, the engine of `rung season`), run here
        // over the strip's span and read every 7th night.
        let site = sites::resolve("pampa-lucero").unwrap();
        let from = chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap();
        let ncol = (w as usize - 16).min(52);
        let to = from + chrono::Days::new(7 * (ncol as u64 - 1));
        let c = rung::plan::season::Constraints::new(30.0, -12.0, None).unwrap();
        let listed: Vec<_> = targets.iter().take(shown.min(targets.len())).collect();
        let places: Vec<_> = listed.iter().map(|t| t.place()).collect();
        let mut want: Vec<Vec<f64>> = vec![Vec::new(); places.len()];
        rung::plan::season::scan(&site, &places, from, to, &c, |n| {
            if n.index % 7 == 0 {
                for (w, r) in want.iter_mut().zip(n.rows) {
                    w.push(r.observable_hours);
                }
            }
            std::ops::ControlFlow::Continue(())
        })
        .unwrap();
        let mut nonzero = 0;
        for (t, hrs) in listed.iter().zip(&want) {
            assert_eq!(hrs.len(), ncol);
            let r = row_of(&rows, &format!(" {} ", t.name));
            let cells: Vec<char> = r.chars().skip(16).take(ncol).collect();
            let expect: Vec<char> = hrs.iter().map(|h| hours_glyph(*h)).collect();
            assert_eq!(cells, expect, "{} at {w}x{h}", t.name);
            // The cached hours are the engine's numbers exactly.
            assert_eq!(&s.season.hours[&t.name][..ncol], &hrs[..], "{}", t.name);
            nonzero += hrs.iter().filter(|h| **h > 0.0).count();
        }
        assert!(nonzero > 10, "the strip shows observable nights");
        assert!(rows[(h - 2) as usize].contains("█ ≥7 h"));
        assert!(rows[(h - 2) as usize].contains("LPO-P01: most"));
    }
}

#[test]
fn help_overlay_is_drawn_from_the_key_table() {
    let mut s = demo_state((160, 48));
    ch(&mut s, '?');
    let (rows, _) = screen(&s, 160, 48);
    assert!(has(&rows, "Keys (Esc closes"));
    for b in KEYMAP.iter().filter(|b| b.scope == Scope::Main) {
        assert!(has(&rows, b.help), "help for {:?} missing", b.action);
    }
    let (small, _) = screen(&s, 80, 24);
    assert!(has(&small, "— Everywhere —") && has(&small, "Roster view"));
    // A key in the table changes what the overlay shows (same source).
    assert!(
        KEYMAP
            .iter()
            .any(|b| b.action == Action::Save && b.help == "save the programme")
    );
}

#[test]
fn form_picker_and_question_overlays() {
    let mut s = demo_state((80, 24));
    ch(&mut s, 'e');
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "Edit LPO-P01"));
    assert!(row_of(&rows, "parallax_mas").contains("68.4"));
    assert!(has(&rows, "Enter check and keep · Esc drop"));
    key(&mut s, crossterm::event::KeyCode::Esc);
    ch(&mut s, 'p');
    let (rows, _) = screen(&s, 160, 48);
    assert!(row_of(&rows, "● pampa-lucero").contains("-27.4521"));
    assert!(has(&rows, "sierra-alcaravan"));
    key(&mut s, crossterm::event::KeyCode::Esc);
    ch(&mut s, 'd');
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "Remove LPO-P01 from the programme?"));
}

#[test]
fn no_color_uses_no_colours_and_colour_run_does() {
    let coloured = |color: bool| {
        let mut s = state_with(
            demo_targets(),
            None,
            "/nonexistent/x.csv".into(),
            true,
            (80, 24),
            color,
        );
        let mut n = 0;
        for v in ['1', '2', '3'] {
            ch(&mut s, v);
            let (_, buf) = screen(&s, 80, 24);
            n += buf
                .content()
                .iter()
                .filter(|c| c.fg != Color::Reset || c.bg != Color::Reset)
                .count();
        }
        n
    };
    assert_eq!(coloured(false), 0);
    assert!(coloured(true) > 100);
}

#[test]
fn sun_caution_is_flagged_for_a_target_beside_the_sun() {
    // A plain target placed on the Sun's position at local noon of the night's start.
    let site = sites::resolve("pampa-lucero").unwrap();
    let night = demo_night();
    let ctx = night.contexts[0];
    let sun = ctx.sun();
    // Observed → approximate RA/Dec is not needed: use the Sun's geocentric direction.
    let v = ctx.sun_geo_au();
    let (ra, dec) = sofars::vm::c2s(&v);
    let mut targets = demo_targets();
    targets.truncate(1);
    targets.push(rung::io::targets::Target::plain(
        "NEAR-SUN",
        ra.to_degrees().rem_euclid(360.0),
        dec.to_degrees(),
    ));
    assert!(sun.alt_geom_rad.to_degrees() > 0.0 && site.sun_avoid_deg == 45.0);
    let mut s = state_with(
        targets,
        None,
        "/nonexistent/x.csv".into(),
        true,
        (80, 24),
        true,
    );
    let (rows, _) = screen(&s, 80, 24);
    assert!(row_of(&rows, "NEAR-SUN").contains("☼!"));
    assert!(!row_of(&rows, "LPO-P01").contains("☼!"));
    ch(&mut s, 'j');
    ch(&mut s, '2');
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "SUN CAUTION"), "{}", rows.join("\n"));
}

fn select(s: &mut rung::tui::State, name: &str) {
    // Down, then up: the target may be above the selection.
    for k in [
        crossterm::event::KeyCode::Down,
        crossterm::event::KeyCode::Up,
    ] {
        for _ in 0..100 {
            if s.selected().unwrap().name == name {
                return;
            }
            key(s, k);
        }
    }
    panic!("{name} cannot be selected");
}

#[test]
fn phase_view_shows_the_pulsator_analysis_at_both_sizes() {
    // The same library call as `rung phase`, made here directly, with the
    // demo programme's settings.
    let targets = demo_targets();
    let t = targets.iter().find(|t| t.name == "LPO-C03").unwrap();
    let r = match rung::programme::report(&demo_settings(), t).unwrap() {
        rung::programme::Report::Phase(r) => *r,
        other => panic!("{other:?}"),
    };
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let mut s = demo_state((w, h));
        ch(&mut s, '5');
        let (rows, _) = screen(&s, w, h);
        assert!(has(
            &rows,
            "LPO-P01 is a parallax target: the Phase view is for pulsators"
        ));
        // Whole at 80 columns too (it was cut before "↑/↓)").
        let said: String = rows[4..7]
            .iter()
            .map(|l| l.trim_end())
            .collect::<Vec<_>>()
            .join(" ");
        assert!(
            said.contains("the Phase view is for pulsators (choose one with ↑/↓)"),
            "{said}"
        );
        select(&mut s, "LPO-C03");
        let (rows, _) = screen(&s, w, h);
        assert!(
            rows[2].starts_with("Phase · ∿ LPO-C03 · P 5.0500 d · 2026-12-01 to "),
            "{}",
            rows[2]
        );
        let cov = format!(
            "{}/{} in {} nights",
            r.plan.bins_covered,
            r.plan.bins,
            r.plan.nights_needed()
        );
        assert!(rows[3].contains(&cov), "{cov}: {}", rows[3]);
        let w0 = &r.windows[0];
        let first = format!(
            "{} {}-{}",
            w0.night.format("%a %b %d"),
            local_hm(w0.start),
            local_hm(w0.end)
        );
        assert!(rows[5].starts_with(&first), "{first}: {}", rows[5]);
        assert!(rows[5].contains('━'));
        let visible = (h - 3 - 3 - 3) as usize;
        assert!(has(
            &rows,
            &r.windows[visible.min(r.windows.len()) - 1]
                .night
                .format("%a %b %d")
                .to_string()
        ));
        let pr = r.prediction.as_ref().unwrap();
        assert!(has(
            &rows,
            &format!("σd/d {:.2}%", pr.distance_precision_pct)
        ));
        assert!(has(&rows, "◆ planned visit"));
    }
}

#[test]
fn chase_view_shows_the_transient_timeline_at_both_sizes() {
    // The same library call as `rung chase`, with the demo programme's settings.
    let targets = demo_targets();
    let t = targets.iter().find(|t| t.name == "LPO-T2026a").unwrap();
    let c = match rung::programme::report(&demo_settings(), t).unwrap() {
        rung::programme::Report::Chase(c) => *c,
        other => panic!("{other:?}"),
    };
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let mut s = demo_state((w, h));
        ch(&mut s, '6');
        let (rows, _) = screen(&s, w, h);
        assert!(has(&rows, "the Chase view is for transients"));
        select(&mut s, "LPO-T2026a");
        let (rows, _) = screen(&s, w, h);
        // An unclassified candidate: the plan says it is provisional.
        assert!(
            rows[2].starts_with("Chase · ✶ LPO-T2026a · PROVISIONAL · BVR · max "),
            "{}",
            rows[2]
        );
        assert!(rows[2].contains(&format!("B {:.1}", c.placement.params.m_max)));
        assert!(rows[3].contains("phase") && rows[3].contains(" B ") && rows[3].contains("plan"));
        let n0 = &c.nights[0];
        let r0 = &rows[4];
        assert!(
            r0.starts_with(&n0.night.format("%a %b %d").to_string()),
            "{r0}"
        );
        assert!(
            r0.contains(&format!("{:+.1}d", n0.phase_days.unwrap())),
            "{r0}"
        );
        assert!(
            r0.contains(&format!("{:.1}", n0.expected_mag.unwrap())),
            "{r0}"
        );
        let planned = rows
            .iter()
            .filter(|r| (r.contains("● obs") || r.contains("◆ spec")) && !r.contains("○ usable"))
            .count();
        let expect = c
            .nights
            .iter()
            .take((h - 2 - 3 - 3) as usize)
            .filter(|n| n.planned)
            .count();
        assert_eq!(planned, expect);
        let b = c.design.budget.unwrap();
        assert!(has(
            &rows,
            &format!(
                "σd/d {:.1}% (floor {:.1}%)",
                b.distance_precision_pct, b.floor_pct
            )
        ));
    }
}

#[test]
fn parallax_view_shows_factors_and_epochs_at_both_sizes() {
    // The same library call as `rung parallax`, with the demo programme's
    // settings (LPO-P03 has a goal: the goal plan).
    let targets = demo_targets();
    let t = targets.iter().find(|t| t.name == "LPO-P03").unwrap();
    let p = match rung::programme::report(&demo_settings(), t).unwrap() {
        rung::programme::Report::Parallax(p) => *p,
        other => panic!("{other:?}"),
    };
    let mut s = demo_state((80, 24));
    ch(&mut s, '4');
    select(&mut s, "LPO-P03");
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        s.size = (w, h);
        let (rows, buf) = screen(&s, w, h);
        // The title's parts whole: at 80 columns the dates are left out
        // rather than the ellipse cut before its unit (it was cut at
        // "ellipse 2.4×1.9" without " mas").
        let head = format!(
            "Parallax · ◆ LPO-P03 · ϖ 112.0 mas · ellipse {:.1}×{:.1} mas",
            p.ellipse.semi_major_mas, p.ellipse.semi_minor_mas
        );
        let title = rows[2].trim_end();
        assert!(title.starts_with(&head), "{title}");
        if w >= 100 {
            assert_eq!(title, format!("{head} · 2026-12-01 to 2029-05-31"));
        } else {
            assert_eq!(title, head);
        }
        assert!(rows[3].starts_with("+1 au") && has(&rows, " 0 au") && has(&rows, "-1 au"));
        let braille = buf
            .content()
            .iter()
            .filter(|c| {
                c.symbol()
                    .chars()
                    .next()
                    .is_some_and(|c| ('\u{2801}'..='\u{28FF}').contains(&c))
            })
            .count();
        assert!(braille > 60, "{braille}");
        let sky = row_of(&rows, "sky  ");
        assert!(sky.contains('█') && sky.contains('·'), "{sky}");
        let epochs = row_of(&rows, "epoch");
        assert!(epochs.contains('◆'));
        let sol = p.solution.as_ref().unwrap();
        // σϖ by term (the DCR bias bound and the relative-to-absolute
        // correction named, as `rung parallax`), σμ and the correlation;
        // then the distance, baseline and verdict, whole at 80 columns.
        let line = format!(
            "σϖ {:.2} mas (fit {:.2}, DCR {:.2}, abs {:.2}) · σμ {:.2} mas/yr · ρ(ϖ,μ) {:+.2}",
            p.sigma_parallax_total_mas.unwrap(),
            sol.sigma_parallax_mas,
            p.dcr_bias_mas.unwrap().abs(),
            p.absolute_correction_mas,
            sol.sigma_pm_masyr,
            sol.corr_parallax_pm
        );
        assert!(has(&rows, &line), "{line}");
        let line = format!(
            "σd/d {:.2}% · {} epochs in {} seasons over {:.2} yr · {:.1} h · {}",
            p.prediction.distance_precision_pct,
            p.epochs.len(),
            p.seasons_available,
            sol.baseline_yr,
            p.prediction.hours_needed,
            p.prediction.verdict.text()
        );
        assert!(has(&rows, &line), "{line}");
        assert!(has(&rows, "◆ chosen epoch"));
        assert!(has(&rows, "2027") && has(&rows, "2028"));
        // The first epoch is picked: its line and its error by term.
        assert!(
            has(&rows, &format!("◈ 1/{} ", p.epochs.len())),
            "{}",
            rows.join("\n")
        );
    }
    // A pulsator is refused with a reason.
    select(&mut s, "LPO-C01");
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "the Parallax view is for parallax targets"));
}

/// The Parallax view's picked epoch against `rung parallax --json` (run at
/// the same clock): J and K move through the epochs, and each one's time,
/// factors, hour angle, airmass, exposure, SNR and error by term (centroid,
/// reference frame, image motion, refraction residual, floor, their total,
/// and the DCR shift) are the json's numbers, whole at 80×24.
#[test]
fn parallax_view_picked_epoch_matches_the_json() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(["parallax", "--target", "LPO-P03", "--json"])
        .env("RUNG_NOW", test_now().iso())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let epochs = j["epochs"].as_array().unwrap();
    assert!(epochs.len() >= 10, "{}", epochs.len());
    let mut s = demo_state((80, 24));
    ch(&mut s, '4');
    select(&mut s, "LPO-P03");
    let f = |e: &serde_json::Value, k: &str| e[k].as_f64().unwrap();
    let n = epochs.len();
    // Forward through every epoch, then one back.
    let mut visits: Vec<usize> = (0..n).collect();
    visits.push(n - 2);
    for (step, &k) in visits.iter().enumerate() {
        if step == n {
            ch(&mut s, 'K');
        } else if step > 0 {
            ch(&mut s, 'J');
        }
        let (rows, _) = screen(&s, 80, 24);
        let e = &epochs[k];
        let t = e["time"].as_str().unwrap();
        let line1 = format!(
            "◈ {}/{n} {}Z Pα {:+.2} Pδ {:+.2} HA {:+.2}h X {:.2} {:.0} s×{} SNR {:.0}",
            k + 1,
            &t[..16],
            f(e, "pf_ra_au"),
            f(e, "pf_dec_au"),
            f(e, "hour_angle_h"),
            f(e, "airmass"),
            f(e, "exptime_s"),
            e["frames"].as_u64().unwrap(),
            f(e, "snr")
        );
        let st = &e["sigma_terms"];
        let line2 = format!(
            "σ {:.2} mas = cent {:.2} ref {:.2} motion {:.2} refr {:.2} floor {:.2} · DCR {:+.2}",
            f(st, "total_mas"),
            f(st, "centroid_mas"),
            f(st, "reference_mas"),
            f(st, "image_motion_mas"),
            f(st, "refraction_mas"),
            f(st, "floor_mas"),
            f(e, "dcr_zenith_mas")
        );
        for l in [&line1, &line2] {
            assert!(l.chars().count() <= 80, "{l}");
            assert!(has(&rows, l), "epoch {k}: {l}\n{}", rows.join("\n"));
        }
        // The total is the terms in quadrature (json and screen alike).
        let q = [
            "centroid_mas",
            "reference_mas",
            "image_motion_mas",
            "refraction_mas",
            "floor_mas",
        ]
        .iter()
        .map(|x| f(st, x).powi(2))
        .sum::<f64>()
        .sqrt();
        assert!((q - f(st, "total_mas")).abs() < 1e-9);
        assert!((f(e, "sigma_mas") - f(st, "total_mas")).abs() < 1e-12);
        // The DCR shift is the plan's mas per tan z times the epoch's tan z.
        let d = j["dcr"]["mas_per_tanz"].as_f64().unwrap() * f(e, "tan_z");
        assert!((d - f(e, "dcr_zenith_mas")).abs() < 1e-9);
    }
    // At the last epoch J stays there.
    ch(&mut s, 'J');
    ch(&mut s, 'J');
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, &format!("◈ {n}/{n} ")), "{}", rows.join("\n"));
}

#[test]
fn budget_view_and_export_match_the_library_budget() {
    use crossterm::event::KeyCode;
    use rung::plan::budget::{Asked, Options, budget_with, figure, proposal};
    let pick = ["LPO-P03", "LPO-P12", "LPO-C03", "LPO-C05", "LPO-T2026a"];
    let targets = demo_subset(&pick);
    // The same calls as `rung budget` (and `rung budget --hours 2.5`), made
    // here directly, with the demo programme's settings (its range,
    // from the settings) and the curves the view computes.
    let st = demo_settings();
    let plain = budget_with(
        &st,
        &targets,
        &Options {
            curves: true,
            ..Default::default()
        },
    )
    .unwrap();
    let asked = Asked {
        hours: Some(2.5),
        ..Default::default()
    };
    let b = budget_with(
        &st,
        &targets,
        &Options {
            curves: true,
            asked: Some(asked),
            confidence: None,
        },
    )
    .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets,
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        true,
    );
    ch(&mut s, '7');
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let (rows, _) = screen(&s, w, h);
        assert!(rows[2].starts_with(&format!(
            "Budget · {} to {} · pampa-lucero · lucero-1m",
            st.from, st.to
        )));
        assert!(
            rows[3].starts_with("no hours asked (b sets them)"),
            "{}",
            rows[3]
        );
        assert!(
            rows[4].contains("goal") && rows[4].contains("reach") && rows[4].contains("verdict")
        );
        for r in &plain.rows {
            let line = row_of(&rows, &r.target);
            assert!(line.contains(&format!("{:.0}%", r.goal_pct)), "{line}");
            assert!(line.contains(&format!(" {:.1} ", r.hours)), "{line}");
            assert!(
                line.contains(&format!(" {:.1} ", r.hours_expected)),
                "{line}"
            );
            assert!(line.contains(&r.verdict.text()), "{line}");
        }
        // Science + calibrations = total, each part whole (the words of
        // `rung budget`), also at 80 columns.
        for part in rung::plan::budget::total_parts(&plain) {
            assert!(has(&rows, &part), "{part}\n{}", rows.join("\n"));
        }
    }
    // Each row's reason says each thing once, and its σd/d by term is the
    // JSON's, every term whole at 80 columns.
    for r in &plain.rows {
        select(&mut s, &r.target);
        for (w, h) in [(80u16, 24u16), (160, 48)] {
            let (rows, _) = screen(&s, w, h);
            let at = rows
                .iter()
                .position(|l| l.starts_with(&format!("{}: ", r.target)))
                .unwrap_or_else(|| panic!("no reason for {}:\n{}", r.target, rows.join("\n")));
            let reason: String = rows[at..]
                .iter()
                .take_while(|l| !l.starts_with("σd/d by term"))
                .map(|l| l.trim_end())
                .collect::<Vec<_>>()
                .join(" ");
            assert!(reason.matches(&r.verdict.text()).count() <= 1, "{reason}");
            if w == 80 {
                for t in &r.error_terms {
                    let part = format!("{} {:.2} %", t.name, t.distance_pct);
                    assert!(has(&rows, &part), "{part}\n{}", rows.join("\n"));
                }
            }
        }
    }
    // The request: 2.5 hours asked, and an export folder typed in.
    ch(&mut s, 'b');
    typed(&mut s, "2.5");
    for _ in 0..3 {
        key(&mut s, KeyCode::Tab);
    }
    for _ in 0..400 {
        key(&mut s, KeyCode::Backspace);
    }
    let out = dir.path().join("for the proposal");
    typed(&mut s, out.to_str().unwrap());
    key(&mut s, KeyCode::Enter);
    assert!(s.overlay.is_none());
    // The keys line names the folder exports go to, its end kept at 80
    // columns (it used to be cut before the folder).
    let (rows, _) = screen(&s, 80, 24);
    let keys = row_of(&rows, ": export to ");
    assert!(keys.trim_end().ends_with("for the proposal"), "{keys}");
    assert!(keys.chars().count() <= 80, "{keys}");
    let a = b.allocation.as_ref().unwrap();
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let (rows, _) = screen(&s, w, h);
        assert!(
            rows[3].starts_with(&format!(
                "2.5 h asked: {}/{} goals met",
                a.goals_met, a.goals_total
            )),
            "{}",
            rows[3]
        );
        for (r, sh) in b.rows.iter().zip(&a.shares) {
            // The table's row (the request line above may name the target).
            let line = rows
                .iter()
                .skip_while(|l| !l.starts_with("target "))
                .find(|l| l.contains(&format!(" {} ", r.target)))
                .unwrap_or_else(|| panic!("no row of {}:\n{}", r.target, rows.join("\n")));
            assert!(line.contains(&format!(" {:.1} ", sh.hours)), "{line}");
            if sh.goal_met {
                assert!(line.contains("reachable · met"), "{line}");
            }
        }
    }
    // Something is met and something is not, with its reason on selection.
    assert!(a.shares.iter().any(|x| x.goal_met) && a.shares.iter().any(|x| !x.goal_met));
    // Every goal not met: what stops it (the term or the constraint, the
    // words and numbers of `rung budget --json`), then its share's why.
    for unmet in a.shares.iter().filter(|x| !x.goal_met) {
        select(&mut s, &unmet.target);
        assert!(!unmet.limit.is_empty(), "{unmet:?}");
        // (Each said once: a why within the limit's words is left out;
        // each part starts a line.)
        let mut why = rung::tui::views::budget::once_each(vec![
            format!("not met, by {}", unmet.limit),
            unmet.why.clone(),
        ]);
        why[0] = format!("{}: {}", unmet.target, why[0]);
        let (rows, _) = screen(&s, 160, 48);
        let shown: String = rows
            .iter()
            .map(|r| r.trim_end())
            .collect::<Vec<_>>()
            .join(" ");
        for part in &why {
            let start: String = part.chars().take(300).collect();
            assert!(shown.contains(&start), "{part}\n{}", rows.join("\n"));
        }
        // At 80 columns the constraint is on screen in full.
        let (rows, _) = screen(&s, 80, 24);
        let shown: String = rows
            .iter()
            .map(|r| r.trim_end())
            .collect::<Vec<_>>()
            .join(" ");
        let head = format!("{}: not met, by {}", unmet.target, unmet.limit);
        assert!(shown.contains(&head), "{head}\n{}", rows.join("\n"));
    }
    // Export writes the library's files into the folder typed, and names
    // each in full, also at 80 columns.
    ch(&mut s, 'x');
    let stem = format!("budget-pampa-lucero-{}-to-{}", st.from, st.to);
    let read = |ext: &str| std::fs::read_to_string(out.join(format!("{stem}{ext}"))).unwrap();
    assert_eq!(read(".csv"), rung::plan::budget::csv(&b));
    // Each row's σd/d by term in the CSV and the Markdown: the numbers of
    // `error_terms` in --json (three and two decimals).
    let csv = read(".csv");
    let json = serde_json::to_value(&b).unwrap();
    for r in json["rows"].as_array().unwrap() {
        let name = r["target"].as_str().unwrap();
        let terms: Vec<String> = r["error_terms"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| {
                format!(
                    "{}={:.3}",
                    t["name"].as_str().unwrap(),
                    t["distance_pct"].as_f64().unwrap()
                )
            })
            .collect();
        assert!(!terms.is_empty(), "{name}");
        let line = csv
            .lines()
            .find(|l| l.starts_with(&format!("{name},")))
            .unwrap();
        assert!(line.ends_with(&terms.join("; ")), "{line}");
        let md: Vec<String> = r["error_terms"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| {
                format!(
                    "{} {:.2} %",
                    t["name"].as_str().unwrap(),
                    t["distance_pct"].as_f64().unwrap()
                )
            })
            .collect();
        assert!(
            read(".md").contains(&format!("- {name}: {}\n", md.join(", "))),
            "{name}"
        );
    }
    // One total: science + calibrations = total in the CSV, as in --json.
    let total = csv.lines().last().unwrap();
    assert!(
        total.starts_with(&format!(
            "total,total,,,,,{:.3},",
            json["total_hours_with_calibrations"].as_f64().unwrap()
        )),
        "{total}"
    );
    assert_eq!(read(".md"), rung::plan::budget::markdown(&b));
    assert_eq!(read(".tex"), proposal::latex(&b));
    assert_eq!(read(".svg"), figure::svg(&b));
    // The PNG is the SVG as a raster.
    assert!(
        std::fs::read(out.join(format!("{stem}.png"))).unwrap()
            == figure::png_of_svg(&figure::svg(&b), figure::PNG_SCALE).unwrap()
    );
    assert_eq!(
        read("-justification.txt"),
        proposal::justification(&b) + "\n"
    );
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        rows[23].starts_with("exported 6 budget files to "),
        "{}",
        rows[23]
    );
    // (A name may be wrapped where it has a space; compare without spaces.)
    let shown: String = rows
        .iter()
        .map(|r| r.trim_matches(|c| c == '│' || c == ' ').replace(' ', ""))
        .collect();
    for ext in [".csv", ".md", ".tex", ".svg", ".png", "-justification.txt"] {
        let full = out.join(format!("{stem}{ext}")).display().to_string();
        assert!(
            shown.contains(&full.replace(' ', "")),
            "{full} not shown in full:\n{}",
            rows.join("\n")
        );
    }
    // Any key closes the list.
    ch(&mut s, 'j');
    assert!(s.overlay.is_none());
}

#[test]
fn plan_export_writes_plan_csv_ics_and_night_sheet_that_read_back() {
    use rung::plan::schedule::{Request, schedule};
    let site = sites::resolve("pampa-lucero").unwrap();
    let pick = ["LPO-P03", "LPO-C03", "LPO-T2026a"];
    let targets = demo_subset(&pick);
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets.clone(),
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        true,
    );
    // The programme's range (the demo's settings file).
    let st = demo_settings();
    let (from, to) = (st.from, st.to);
    assert_eq!((s.settings.from, s.settings.to), (from, to));
    ch(&mut s, 'X');
    let stem = format!("plan-pampa-lucero-{from}-to-{to}");
    let json = dir.path().join(format!("{stem}.json"));
    let plan = rung::plan::file::load(&json).unwrap();
    assert_eq!(plan.format, rung::plan::file::FORMAT);
    assert_eq!((plan.from, plan.to), (from, to));
    assert_eq!((plan.min_alt_deg, plan.sun_alt_deg), (30.0, -12.0));
    plan.check_targets(&targets, &json).unwrap();
    // The visits are those of the library's scheduler called here as `rung plan` calls it.
    let want = schedule(&Request::programme(
        &st,
        &targets,
        rung::tui::state::PLAN_HOURS_PER_NIGHT,
    ))
    .unwrap();
    assert!(!want.visits.is_empty());
    // (The plan file keeps times to the second, so compare them to that.)
    assert_eq!(plan.visits.len(), want.visits.len());
    for (a, b) in plan.visits.iter().zip(&want.visits) {
        assert_eq!((&a.id, &a.target, a.night), (&b.id, &b.target, b.night));
        assert!(a.start.seconds_since(&b.start).abs() < 1.0, "{}", a.id);
        assert!(a.end.seconds_since(&b.end).abs() < 1.0, "{}", a.id);
        assert_eq!(a.n_exposures, b.n_exposures);
    }
    // CSV: the library's text, one header and a row per visit.
    let csv = std::fs::read_to_string(dir.path().join(format!("{stem}.csv"))).unwrap();
    assert_eq!(csv, rung::plan::export::visits_csv(&want.visits, &site));
    assert_eq!(csv.lines().count(), plan.visits.len() + 1);
    // iCalendar (RFC 5545): one VCALENDAR with a VEVENT per visit.
    let ics = std::fs::read_to_string(dir.path().join(format!("{stem}.ics"))).unwrap();
    assert!(ics.starts_with("BEGIN:VCALENDAR\r\n"));
    assert!(ics.trim_end().ends_with("END:VCALENDAR"));
    assert_eq!(ics.matches("BEGIN:VEVENT").count(), plan.visits.len());
    // Tonight's sheet.
    let sheet =
        std::fs::read_to_string(dir.path().join("night-pampa-lucero-2026-12-01.md")).unwrap();
    assert!(sheet.starts_with("# Night sheet 2026-12-01 at pampa-lucero"));
    let tonight = plan.visits.iter().filter(|v| v.night == from).count();
    assert_eq!(
        sheet
            .lines()
            .filter(|l| l.starts_with("| ") && !l.starts_with("| start") && !l.starts_with("| ---"))
            .count(),
        tonight
    );
    // The message line says where the files went.
    let (rows, _) = screen(&s, 160, 48);
    let msg = &rows[47];
    assert!(
        msg.starts_with(&format!(
            "exported to {}: {stem}.json/.csv/.ics, night-pampa-lucero-2026-12-01.md",
            dir.path().display()
        )),
        "{msg}"
    );
}

#[test]
fn roster_shows_progress_towards_each_goal_from_the_budget() {
    let pick = ["LPO-P03", "LPO-C03", "LPO-C05", "LPO-T2026a"];
    let mut targets = demo_subset(&pick);
    // One target without a goal shows a dash.
    targets[0].goal_pct = None;
    let nogoal = targets[0].name.clone();
    // The same call as `rung budget` with the programme's settings, made here directly.
    let b = rung::plan::budget::budget(&demo_settings(), &targets).unwrap();
    assert!(!b.rows.is_empty());
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets.clone(),
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        true,
    );
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        let (rows, _) = screen(&s, w, h);
        assert!(rows[3].contains("σd/d·goal"), "{}", rows[3]);
        for r in &b.rows {
            let g = format!("{:.1}", r.goal_pct);
            let g = g.strip_suffix(".0").unwrap_or(&g);
            let a = match &r.verdict {
                _ if r.achievable_pct.is_finite() => format!("{:.1}", r.achievable_pct),
                rung::ladder::Verdict::NeedsMoreSeasons { seasons: Some(n) } => {
                    format!("{n} seas")
                }
                rung::ladder::Verdict::NotObservable { .. } => "unobs".into(),
                _ => "—".into(),
            };
            let mark = if r.verdict == rung::ladder::Verdict::Reachable {
                "✓"
            } else {
                " "
            };
            let line = row_of(&rows, &r.target);
            assert!(line.contains(&format!("{a}/{g}%{mark}")), "{line}");
        }
        assert!(row_of(&rows, &nogoal).contains(" — "));
    }
    // The Budget view reuses the roster's budget: no second computation.
    assert!(rung::tui::update(&mut s, rung::tui::Msg::Act(Action::ShowBudget)).is_none());
    assert_eq!(s.view, View::Budget);
    // While the budget is computed the column says so.
    let (mut fresh, _) = rung::tui::init(rung::tui::Setup {
        sites: sites::catalogue().unwrap(),
        settings: demo_settings(),
        date: Some(chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()),
        now: test_now(),
        targets: targets.clone(),
        programme: s.programme.clone(),
        size: (80, 24),
        theme: rung::tui::theme::Theme { color: false },
        message: None,
        instruments: s.instruments.clone(),
        recovered: None,
    });
    fresh.size = (80, 24);
    let (rows, _) = screen(&fresh, 80, 24);
    assert!(row_of(&rows, &targets[1].name).contains("…/"), "{rows:?}");
}

#[test]
fn plan_export_uses_the_hours_a_night_set_with_h_and_capital_h() {
    let pick = ["LPO-P03", "LPO-C03", "LPO-C05", "LPO-T2026a"];
    let targets = demo_subset(&pick);
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets.clone(),
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        true,
    );
    assert_eq!(
        s.plan_hours_per_night,
        rung::tui::state::PLAN_HOURS_PER_NIGHT
    );
    // Steps of an hour, held inside 1..14 h.
    for _ in 0..20 {
        ch(&mut s, 'h');
    }
    assert_eq!(s.plan_hours_per_night, 1.0);
    for _ in 0..30 {
        ch(&mut s, 'H');
    }
    assert_eq!(s.plan_hours_per_night, 14.0);
    for _ in 0..12 {
        ch(&mut s, 'h');
    }
    assert_eq!(s.plan_hours_per_night, 2.0);
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        rows[23].starts_with("plan export: 2 telescope hours a night"),
        "{}",
        rows[23]
    );
    // The Budget view's footer names the setting and its keys.
    ch(&mut s, '7');
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "X: plan at 2 h/night (h/H)"), "{rows:?}");
    // The exported plan records it, and no night holds more than that.
    ch(&mut s, 'X');
    let (from, to) = (s.settings.from, s.settings.to);
    let json = dir
        .path()
        .join(format!("plan-pampa-lucero-{from}-to-{to}.json"));
    let plan = rung::plan::file::load(&json).unwrap();
    assert_eq!(plan.hours_per_night, 2.0);
    assert!(!plan.visits.is_empty());
    let mut per_night: std::collections::BTreeMap<chrono::NaiveDate, f64> = Default::default();
    for v in &plan.visits {
        *per_night.entry(v.night).or_default() += v.end.seconds_since(&v.start) / 3600.0;
    }
    for (n, h) in per_night {
        assert!(h <= 2.0 + 1.0 / 3600.0, "{n}: {h} h");
    }
}

#[test]
fn season_labels_keep_every_month_nightly_and_weekly() {
    // Nightly columns from 2026-12-01: January begins at column 31 with room for "Jan 2027".
    let mut s = demo_state((80, 24));
    ch(&mut s, '3');
    ch(&mut s, 'g');
    assert_eq!(s.season_step_days, 1);
    let (rows, _) = screen(&s, 80, 24);
    let labels: String = rows[3].chars().skip(16).collect();
    assert!(labels.starts_with("Dec "), "{labels}");
    assert_eq!(
        labels.chars().skip(31).take(8).collect::<String>(),
        "Jan 2027",
        "{labels}"
    );
    // Weekly from mid-January 2027 (a year of columns at 160 wide): every month
    // that begins inside the strip is labelled where it begins.
    let mut s = demo_state((160, 48));
    for _ in 0..6 {
        ch(&mut s, ']');
    }
    ch(&mut s, '3');
    assert_eq!(
        s.date,
        chrono::NaiveDate::from_ymd_opt(2027, 1, 12).unwrap()
    );
    let (rows, _) = screen(&s, 160, 48);
    let labels: String = rows[3].chars().skip(16).collect();
    // (Column 0 is the 12th: January has only three columns there, too few
    // for any label and a gap, so it is checked as blank; the strip's last
    // month, cut short by the strip's end, is not checked.)
    assert!(labels.starts_with("   Feb"), "{labels}");
    let mut d = s.date;
    for c in 0..48usize {
        if c > 0 && chrono::Datelike::day(&d) <= 7 {
            let want = if chrono::Datelike::month(&d) == 1 {
                d.format("'%y").to_string()
            } else {
                d.format("%b").to_string()
            };
            let got: String = labels.chars().skip(c).take(want.chars().count()).collect();
            assert_eq!(got, want, "column {c} ({d}): {labels}");
        }
        d = d + chrono::Days::new(7);
    }
}

#[test]
fn roster_moon_and_sun_columns_are_the_numbers_of_rung_night_json() {
    // The UI holds no science: the Roster's Moon distance and Sun caution for
    // every target are what `rung night --json` prints for the same night.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args([
            "night",
            "--site",
            "pampa-lucero",
            "--date",
            "2026-12-01",
            "--targets",
            demo_file().to_str().unwrap(),
            "--json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let s = demo_state((160, 80));
    let (rows, _) = screen(&s, 160, 80);
    let mut cautions = 0;
    for t in v["targets"].as_array().unwrap() {
        let name = t["name"].as_str().unwrap();
        let r = s.row(name).unwrap();
        // (serde_json's default float parsing is not bit-exact: compare to 1e-9°.)
        match (r.moon_separation_deg, t["moon_separation_deg"].as_f64()) {
            (Some(a), Some(b)) => assert!((a - b).abs() < 1e-9, "{name}: {a} vs {b}"),
            (a, b) => assert_eq!(a, b, "{name}"),
        }
        let line = row_of(&rows, &format!(" {name} "));
        if let Some(m) = r.moon_separation_deg {
            assert!(line.contains(&format!("{m:.0}°")), "{line}");
        }
        match (&r.sun_caution, t["sun_caution"].as_object()) {
            (None, None) => assert!(!line.contains('!'), "{line}"),
            (Some((at, text)), Some(j)) => {
                cautions += 1;
                assert_eq!(j["first"].as_str().unwrap(), at.iso(), "{name}");
                assert_eq!(j["text"].as_str().unwrap(), text, "{name}");
                assert!(line.contains('!'), "{line}");
            }
            (a, b) => panic!("{name}: UI {a:?}, rung night {b:?}"),
        }
    }
    assert!(cautions > 0, "the demo night has daytime Sun cautions");
}

#[test]
fn phase_view_shows_a_field_as_one_unit() {
    // The same library call as `rung phase --field LPO-G1`, made here
    // directly with the demo programme's settings.
    let targets = demo_targets();
    let links = rung::ladder::field::link(&targets);
    let g = links.by_name(&targets, "LPO-G1").unwrap();
    let r = demo_settings().field_report(&targets, g).unwrap();
    let d = r.distance.as_ref().unwrap();
    let mut s = demo_state((80, 24));
    ch(&mut s, '5');
    select(&mut s, "LPO-G1");
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        rows[2].starts_with("Phase · ◎ LPO-G1 · 30 stars · 1 pointing · "),
        "{}",
        rows[2]
    );
    let visits: usize = r.pointings.iter().map(|p| p.epochs.len()).sum();
    assert!(
        rows[3].starts_with(&format!(
            "{visits} visits · {:.1} h · {}",
            r.prediction.hours_needed,
            r.prediction.verdict.text()
        )),
        "{}",
        rows[3]
    );
    // The stars with their points and moduli, the field's distance, each term.
    let x = &r.stars[0];
    let first = row_of(&rows, &x.name);
    assert!(
        first.contains(&format!("{:.3}", x.distance_modulus_mag.unwrap())),
        "{first}"
    );
    assert!(has(
        &rows,
        &format!(
            "published zp: μ {:.3} ± {:.3} · {:.1} kpc · σd/d {:.2}%",
            d.distance_modulus_mag,
            d.sigma_mu_mag,
            d.distance_pc / 1000.0,
            d.distance_precision_pct
        )
    ));
    // Each term on its line: own (averaging down with N) or shared (the
    // relation's calibration, the field's metallicity, the band's
    // photometric calibration).
    let own = row_of(&rows, "σμ own: ");
    let shared = row_of(&rows, "σμ shared: ");
    for t in &d.error_terms {
        let line = if t.shared { &shared } else { &own };
        assert!(line.contains(&format!("{:.3}", t.sigma_mag)), "{line}");
    }
    assert!(
        shared.contains("[Fe/H] ") && shared.contains("cal 0.010"),
        "{shared}"
    );
    assert!(!own.contains("[Fe/H]"), "{own}");
    // A star of the field shows the same unit, that star marked and in sight.
    select(&mut s, "LPO-G1-C25");
    let (rows2, _) = screen(&s, 80, 24);
    assert_eq!(rows2[2], rows[2]);
    assert!(has(&rows2, "LPO-G1-C25"));
    assert!(has(&rows2, "rows "), "the 30 stars scroll at 80x24");
}

#[test]
fn the_budget_view_says_an_observed_calibrator_is_no_goal() {
    // LPO-S2024a is observed already: no row, no goal; the view's totals
    // name it as serving the ladder, its reason is the budget's line, and
    // the Roster shows no goal for it (#18).
    let targets = demo_subset(&["LPO-S2024a", "LPO-T2026a"]);
    let b = rung::plan::budget::budget(&demo_settings(), &targets).unwrap();
    assert!(b.rows.iter().all(|r| r.target != "LPO-S2024a"));
    let line = b.observed[0].text.clone();
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets.clone(),
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        true,
    );
    assert_eq!(s.progress(&targets[0]), rung::tui::state::Progress::NoGoal);
    ch(&mut s, '7');
    select(&mut s, "LPO-S2024a");
    let (rows, _) = screen(&s, 160, 48);
    let all = rows.join("\n");
    assert!(
        has(&rows, "observed, serving the ladder, no goal: LPO-S2024a"),
        "{all}"
    );
    assert!(all.replace('\n', " ").contains(&line[..60]), "{all}");
}

/// The Phase view's note line shows the first of a field's notes and says
/// how many more there are; `m` opens them all, wrapped whole, so the
/// longest of them (as `rung phase --field LPO-G1` prints it; over a range
/// too short for the visits to span the longest periods, the note naming
/// the stars left with part of their cycle) is reachable at 80x24.
#[test]
fn phase_view_reaches_every_note_of_a_field() {
    let targets = demo_targets();
    let links = rung::ladder::field::link(&targets);
    let g = links.by_name(&targets, "LPO-G1").unwrap();
    let r = demo_settings().field_report(&targets, g).unwrap();
    let long = r
        .notes
        .iter()
        .max_by_key(|n| n.chars().count())
        .expect("the field's notes")
        .clone();
    // Longer than the window is wide: it must wrap to be read whole.
    assert!(long.chars().count() > 80, "{long}");
    let n = r.cautions.len() + r.notes.len();
    assert!(n > 1);
    let mut s = demo_state((80, 24));
    ch(&mut s, '5');
    select(&mut s, "LPO-G1");
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        has(&rows, &format!("(+{} more: m)", n - 1)),
        "{}",
        rows.join("\n")
    );
    ch(&mut s, 'm');
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, &format!("Notes ({n})")), "{}", rows.join("\n"));
    assert!(has(&rows, "any key closes"), "{}", rows.join("\n"));
    // The whole note, word by word, in the window's lines in order.
    let text: String = window_rows(&rows).join(" ");
    let text = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        text.contains(&long),
        "{long:?} not on screen:\n{}",
        rows.join("\n")
    );
    // Any key closes it.
    ch(&mut s, 'x');
    let (rows, _) = screen(&s, 80, 24);
    assert!(!has(&rows, &format!("Notes ({n})")));
}

/// The inside of the window drawn over the view: the text between the
/// frame's sides, row by row (its foot last).
fn window_rows(rows: &[String]) -> Vec<String> {
    rows.iter()
        .filter_map(|l| {
            let a = l.find('│')?;
            let b = l.rfind('│')?;
            (b > a).then(|| l[a + '│'.len_utf8()..b].trim().to_string())
        })
        .collect()
}

/// The notes window's text at 80x24, every line of it: scrolled with ↓ a
/// line at a time until its foot says the last line is shown.
fn notes_text(s: &mut rung::tui::State) -> String {
    let mut all: Vec<String> = Vec::new();
    for _ in 0..200 {
        let (rows, _) = screen(s, 80, 24);
        let inside = window_rows(&rows);
        let foot = inside.last().cloned().unwrap_or_default();
        let text = &inside[..inside.len().saturating_sub(2)];
        // "lines a–b of n · …" while it scrolls; "any key closes" alone
        // when it all fits.
        let end = match foot.split_once(" of ") {
            None => true,
            Some((head, tail)) => {
                let b = head.rsplit('–').next().unwrap();
                let n = tail.split(' ').next().unwrap();
                b == n
            }
        };
        if end {
            all.extend(text.iter().cloned());
            return all
                .join(" ")
                .split_whitespace()
                .collect::<Vec<_>>()
                .join(" ");
        }
        all.push(text[0].clone());
        key(s, crossterm::event::KeyCode::Down);
    }
    panic!("the notes window does not reach its end");
}

/// The Parallax, Chase and Budget views show as many of their notes as
/// their lines hold, each whole or ending in how many more there are and
/// the key (they showed the first one or two cut at the screen's edge: the
/// Parallax view's "reference frame estimated from Galactic star counts
/// ... 7 stars of", the Chase view's first note alone); `m` opens all of
/// them, and a window longer than the screen scrolls to its last line.
#[test]
fn parallax_chase_and_budget_views_reach_every_note() {
    use rung::programme::Report;
    let pick = ["LPO-P01", "LPO-T2026a"];
    let targets = demo_subset(&pick);
    let st = demo_settings();
    let report = |name: &str| {
        let t = targets.iter().find(|t| t.name == name).unwrap();
        rung::programme::report(&st, t).unwrap()
    };
    let Report::Parallax(p) = report("LPO-P01") else {
        panic!("LPO-P01 is a parallax star")
    };
    let Report::Chase(c) = report("LPO-T2026a") else {
        panic!("LPO-T2026a is a transient")
    };
    let b = rung::plan::budget::budget_with(
        &st,
        &targets,
        &rung::plan::budget::Options {
            curves: true,
            ..Default::default()
        },
    )
    .unwrap();
    let cases = [
        ('4', "LPO-P01", rung::tui::views::parallax::note_items(&p)),
        ('6', "LPO-T2026a", rung::tui::views::chase_foot::items(&c).0),
        (
            '7',
            "LPO-P01",
            rung::tui::views::budget::reason_items(&b, Some("LPO-P01")),
        ),
    ];
    let dir = tempfile::tempdir().unwrap();
    for (view, name, items) in cases {
        // Each has more than its lines hold at 80x24.
        assert!(items.len() > 1, "{name}: {items:?}");
        let mut s = state_with(
            targets.clone(),
            None,
            dir.path().join("programme.csv"),
            true,
            (80, 24),
            true,
        );
        ch(&mut s, view);
        select(&mut s, name);
        let (rows, _) = screen(&s, 80, 24);
        let all = rows.join("\n");
        let start: String = items[0].chars().take(30).collect();
        assert!(all.contains(&start), "{start}\n{all}");
        assert!(
            all.contains(" more: m)") || all.contains("(m: whole)"),
            "{all}"
        );
        // The notes window scrolls to its last line also when a long
        // message takes three of the bottom lines.
        s.message = Some((
            "a warning long enough to wrap onto three lines at eighty columns ".repeat(3),
            rung::tui::state::Level::Warn,
        ));
        ch(&mut s, 'm');
        let text = notes_text(&mut s);
        for item in &items {
            let want = item.split_whitespace().collect::<Vec<_>>().join(" ");
            assert!(text.contains(&want), "{want:?} not in the window:\n{text}");
        }
        // Esc (as any other key) closes it.
        key(&mut s, crossterm::event::KeyCode::Esc);
        let (rows, _) = screen(&s, 80, 24);
        assert!(!has(&rows, &format!("Notes ({})", items.len())));
    }
    // Elsewhere the key says where the notes are.
    let mut s = demo_state((80, 24));
    ch(&mut s, '1');
    ch(&mut s, 'm');
    let (rows, _) = screen(&s, 80, 24);
    assert!(
        has(&rows, "Parallax (4), Phase (5), Chase (6) and Budget (7)"),
        "{}",
        rows.join("\n")
    );
}

/// A warning or confirmation longer than the screen is wide wraps upward over
/// the view (at most three lines) instead of being cut at the right edge; a
/// short one, and a hint of any length, keep the one bottom line.
#[test]
fn a_long_message_wraps_over_the_bottom_lines_at_80_columns() {
    let mut s = demo_state((80, 24));
    let long = "/home/observer/programmes/south-2027/programme.csv.lock is held by process \
                4194300, not running on this machine (another host or container sharing the \
                folder?): this session counts as a second one";
    s.message = Some((long.to_string(), rung::tui::state::Level::Warn));
    let (rows, _) = screen(&s, 80, 24);
    let low: Vec<&str> = rows[21..24].iter().map(|r| r.trim_end()).collect();
    let joined = low.join(" ");
    for word in [
        "programme.csv.lock",
        "4194300,",
        "folder?):",
        "second",
        "one",
    ] {
        assert!(joined.contains(word), "{word} missing from {low:?}");
    }
    assert!(
        rows[20].contains("LPO-"),
        "the view keeps the rows above: {rows:?}"
    );
    s.message = Some(("saved".to_string(), rung::tui::state::Level::Good));
    let (rows, _) = screen(&s, 80, 24);
    assert_eq!(rows[23].trim_end(), "saved");
    assert!(rows[22].contains("LPO-"), "{rows:?}");
    s.message = Some((long.to_string(), rung::tui::state::Level::Info));
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[23].starts_with("/home/observer/"), "{rows:?}");
    assert!(rows[22].contains("LPO-"), "{rows:?}");
}
