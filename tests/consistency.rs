//! One programme, one answer (#14 item 2): every demo target on every
//! surface. The terminal UI is rendered into ratatui's `TestBackend` (Roster
//! and Tonight for the night of 2026-12-01, the Budget view, and each
//! target's method view) and the command line is run as an observer runs it
//! (`rung night`, `parallax`, `phase`, `chase`, `budget`, `plan`, all with
//! `--json`), with the demo programme's own settings
//! (targets-demo/targets.settings.toml), the same clock and an empty user
//! config folder. The test fails on any difference in a target's window,
//! hours, airmass, Moon distance, transit, highest altitude, Sun caution,
//! epochs, precision, hours needed, goal, verdict and its wording.
//!
//! Numbers are compared exactly between JSON documents (serde_json writes
//! every f64 so that it reads back to the same bits) and, against the screen,
//! as the screen writes them (the decimals of each column), built here from
//! the JSON. The columns of the Roster are found by their headers, so a new
//! column does not break the sweep.

#[path = "tui_support.rs"]
mod support;

use rung::astro::time::{Instant, parse_instant};
use serde_json::Value;
use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;
use support::*;

const DATE: &str = "2026-12-01";
const ZONE: chrono_tz::Tz = chrono_tz::America::Argentina::Catamarca;

/// The demo programme's file, relative to the repository (as a user types it).
const DEMO: &str = "targets-demo/targets.csv";

fn repo() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// Run `rung` with the test's clock and user config folder; its JSON, or the
/// error line when it exits with an error.
fn rung(cfg: &Path, args: &[&str]) -> Result<Value, String> {
    let out = Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(repo())
        .env("RUNG_CONFIG_DIR", cfg)
        .env("RUNG_NOW", "2026-12-02T01:00:00Z")
        .env("NO_COLOR", "1")
        .output()
        .unwrap();
    if out.status.success() {
        Ok(serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
            panic!(
                "rung {args:?}: not JSON ({e}): {}",
                String::from_utf8_lossy(&out.stdout)
            )
        }))
    } else {
        Err(String::from_utf8_lossy(&out.stderr).trim().to_string())
    }
}

/// Local HH:MM of an ISO instant at the demo site.
fn local_hm(iso: &Value) -> String {
    match iso.as_str() {
        None => "—".into(),
        Some(s) => {
            let t: Instant = parse_instant(s).unwrap();
            t.local(&ZONE).format("%H:%M").to_string()
        }
    }
}

/// A JSON number with `dp` decimals, "—" for null.
fn fixed(v: &Value, dp: usize) -> String {
    match v.as_f64() {
        Some(x) => format!("{x:.dp$}"),
        None => "—".into(),
    }
}

/// A goal as the Roster writes it: "3", "2.5".
fn goal_text(g: f64) -> String {
    let t = format!("{g:.1}");
    t.strip_suffix(".0").map(str::to_string).unwrap_or(t)
}

/// The screen as rows of cells (one symbol per column).
fn cells(s: &rung::tui::State, w: u16, h: u16) -> Vec<Vec<String>> {
    let (_, buf) = screen(s, w, h);
    (0..h)
        .map(|y| (0..w).map(|x| buf[(x, y)].symbol().to_string()).collect())
        .collect()
}

fn text(row: &[String]) -> String {
    row.concat()
}

/// Runs of non-blank cells: (first column, one past the last, text).
fn tokens(row: &[String]) -> Vec<(usize, usize, String)> {
    let mut out = Vec::new();
    let mut cur: Option<(usize, String)> = None;
    for (x, c) in row.iter().enumerate() {
        let blank = c.trim().is_empty();
        match (&mut cur, blank) {
            (None, false) => cur = Some((x, c.clone())),
            (Some((_, t)), false) => t.push_str(c),
            (Some((s, t)), true) => {
                out.push((*s, x, std::mem::take(t)));
                cur = None;
            }
            (None, true) => {}
        }
    }
    if let Some((s, t)) = cur {
        out.push((s, row.len(), t));
    }
    out
}

/// A table on screen read by its header row. Columns are separated by one
/// blank and each header lies inside its column, aligned as its cells are: a
/// left-aligned cell is the text that starts between its header's start and
/// the next header; a right-aligned one, the text that ends between the
/// previous header's end and its header's end.
struct Table {
    /// Name → (start, end, previous header's end, next header's start, right-aligned).
    columns: BTreeMap<String, (usize, usize, usize, usize, bool)>,
}

impl Table {
    /// `names`: each column's header text, with `>` before a right-aligned one.
    fn new(header: &[String], names: &[&str]) -> Table {
        let blank = |x: Option<&String>| x.is_none_or(|c| c.trim().is_empty());
        let toks = tokens(header);
        let columns = names
            .iter()
            .map(|n| {
                let right = n.starts_with('>');
                let n = n.trim_start_matches('>');
                let want: Vec<String> = n.chars().map(String::from).collect();
                let a = (0..header.len().saturating_sub(want.len() - 1))
                    .find(|&a| {
                        header[a..a + want.len()] == want[..]
                            && (a == 0 || blank(header.get(a - 1)))
                            && blank(header.get(a + want.len()))
                    })
                    .unwrap_or_else(|| panic!("no column {n:?} in {:?}", text(header)));
                let b = a + want.len();
                let prev = toks
                    .iter()
                    .filter(|t| t.1 <= a)
                    .map(|t| t.1)
                    .max()
                    .unwrap_or(0);
                let next = toks
                    .iter()
                    .filter(|t| t.0 >= b)
                    .map(|t| t.0)
                    .min()
                    .unwrap_or(header.len());
                (n.to_string(), (a, b, prev, next, right))
            })
            .collect();
        Table { columns }
    }

    fn cell(&self, row: &[String], name: &str) -> String {
        let (a, b, prev, next, right) = self.columns[name];
        // Text that starts in a left-aligned column is that column's.
        let left_owned = |s: usize| {
            self.columns
                .values()
                .any(|&(a, _, _, next, right)| !right && s >= a && s < next)
        };
        tokens(row)
            .into_iter()
            .filter(|(s, e, _)| {
                if right {
                    *e > prev && *e <= b && !left_owned(*s)
                } else {
                    *s >= a && *s < next
                }
            })
            .map(|(_, _, t)| t)
            .collect::<Vec<_>>()
            .join(" ")
    }
}

/// The row of the table whose runs include `name` exactly.
fn row_named<'a>(rows: &'a [Vec<String>], name: &str) -> &'a [String] {
    rows.iter()
        .find(|r| tokens(r).iter().any(|(_, _, t)| t == name))
        .unwrap_or_else(|| panic!("no row for {name}"))
}

fn select(s: &mut rung::tui::State, name: &str) {
    use crossterm::event::KeyCode::{Down, Up};
    // Down the list, then back up (the target may lie above the selection).
    for k in [Down, Up] {
        for _ in 0..100 {
            if s.selected().unwrap().name == name {
                return;
            }
            key(s, k);
        }
    }
    panic!("{name} not reached");
}

/// One difference, collected so that the failure lists them all.
struct Diffs(Vec<String>);

impl Diffs {
    fn eq<T: PartialEq + std::fmt::Debug>(&mut self, what: String, a: T, b: T) {
        if a != b {
            self.0.push(format!("{what}: {a:?} ≠ {b:?}"));
        }
    }
    fn has(&mut self, what: String, line: &str, needle: &str) {
        if !line.contains(needle) {
            self.0.push(format!("{what}: {needle:?} not in {line:?}"));
        }
    }
}

/// A method command's name for a kind.
fn command(kind: &str) -> &'static str {
    match kind {
        "parallax" => "parallax",
        "pulsator" => "phase",
        "transient" => "chase",
        other => panic!("no method command for {other}"),
    }
}

/// The view key of a kind's method view.
fn view_key(kind: &str) -> char {
    match kind {
        "parallax" => '4',
        "pulsator" => '5',
        "transient" => '6',
        other => panic!("no method view for {other}"),
    }
}

#[test]
fn every_demo_target_agrees_on_every_surface() {
    // An empty user config folder, for the commands and for this process
    // (the only test in this binary, so no other thread reads the variable).
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any thread of this test binary reads the environment.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let cfg = cfg.path();

    // ---- The command line, as an observer runs it on the demo programme.
    let night = rung(cfg, &["night", "--targets", DEMO, "--date", DATE, "--json"]).unwrap();
    let budget = rung(cfg, &["budget", "--targets", DEMO, "--json"]).unwrap();
    let plan = rung(
        cfg,
        &[
            "plan",
            "--targets",
            DEMO,
            "--hours-per-night",
            "8",
            "--json",
        ],
    )
    .unwrap();
    let all = demo_targets();
    assert_eq!(all.len(), 71, "the demo programme");
    // The targets planned on their own: a field and its stars are one unit,
    // whose surfaces (rung phase --field, rung budget, the Phase view) are
    // compared in tests/field_plan.rs and tests/tui_views.rs. A supernova
    // already observed (its peak's error given: nothing is planned for it)
    // has its calibration compared in rung chase, rung ladder and the Chase
    // view by tests/ladder_calibrator.rs and tests/ladder_view.rs.
    let targets: Vec<_> = all
        .into_iter()
        .filter(|t| t.kind.as_str() != "field" && t.field.trim().is_empty())
        .filter(|t| t.peak_err_mag.is_none())
        .collect();
    assert_eq!(
        targets.len(),
        26,
        "the demo's planned targets outside its fields"
    );
    // Every target's method command, two at a time (the machine's cores).
    let methods: BTreeMap<String, Result<Value, String>> = std::thread::scope(|sc| {
        let chunks: Vec<_> = targets
            .chunks(targets.len().div_ceil(2))
            .map(|ch| {
                sc.spawn(move || {
                    ch.iter()
                        .map(|t| {
                            let cmd = command(t.kind.as_str());
                            (
                                t.name.clone(),
                                rung(
                                    cfg,
                                    &[cmd, "--targets", DEMO, "--target", &t.name, "--json"],
                                ),
                            )
                        })
                        .collect::<Vec<_>>()
                })
            })
            .collect();
        chunks.into_iter().flat_map(|h| h.join().unwrap()).collect()
    });

    // The settings every surface used: the programme's own.
    let settings = demo_settings();
    for doc in [&budget, &plan] {
        let s = &doc["settings"];
        assert_eq!(s["from"], "2026-12-01", "{s}");
        assert_eq!(s["to"], "2029-05-31", "{s}");
        assert_eq!(s["site"], "pampa-lucero", "{s}");
        assert_eq!(s["instrument"], "lucero-1m", "{s}");
    }
    assert_eq!(settings.from.to_string(), "2026-12-01");
    assert_eq!(settings.to.to_string(), "2029-05-31");
    assert_eq!(night["site"], "pampa-lucero");
    assert_eq!(night["min_alt_deg"], settings.limits.min_alt_deg);
    assert_eq!(night["sun_alt_deg"], settings.limits.sun_alt_deg);

    let by_name = |arr: &Value, key: &str| -> BTreeMap<String, Value> {
        arr.as_array()
            .unwrap()
            .iter()
            .map(|r| (r[key].as_str().unwrap().to_string(), r.clone()))
            .collect()
    };
    let night_rows = by_name(&night["targets"], "name");
    let budget_rows = by_name(&budget["rows"], "target");
    let outcomes = by_name(&plan["outcomes"], "target");
    let skipped: BTreeMap<String, String> = budget["skipped"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| {
            (
                x[0].as_str().unwrap().to_string(),
                x[1].as_str().unwrap().to_string(),
            )
        })
        .collect();

    // ---- The terminal UI on the same programme, night and clock.
    // Tall enough for the demo's 71 targets in the Roster.
    let (w, h) = (160u16, 80u16);
    let mut s = demo_state((w, h));
    assert_eq!(
        *s.settings, settings,
        "the UI's settings are the programme's"
    );
    let roster = cells(&s, w, h);
    let hdr = roster
        .iter()
        .position(|r| {
            let t = text(r);
            t.contains("window") && t.contains("airm") && t.contains("σd/d·goal")
        })
        .expect("the Roster's header");
    let rt = Table::new(
        &roster[hdr],
        &[
            "name",
            "kind",
            "window",
            ">hours",
            ">airm",
            ">Moon",
            ">σd/d·goal",
            ">trans",
            ">max",
            "sun",
        ],
    );
    let roster_rows = &roster[hdr + 1..];

    let mut d = Diffs(Vec::new());
    let mut compared = BTreeMap::<&str, usize>::new();
    for t in &targets {
        let n = t.name.as_str();
        let kind = t.kind.as_str();
        let nr = &night_rows[n];

        // Roster ↔ rung night --json: the night's numbers.
        let row = row_named(roster_rows, n);
        let windows = nr["windows"].as_array().unwrap();
        let want_window = if windows.is_empty() {
            "none".to_string()
        } else {
            let more = if windows.len() > 1 { "+" } else { "" };
            format!(
                "{}-{}{more}",
                local_hm(&nr["window_start"]),
                local_hm(&nr["window_end"])
            )
        };
        d.eq(
            format!("{n} Roster window"),
            rt.cell(row, "window"),
            want_window.clone(),
        );
        d.eq(
            format!("{n} Roster hours"),
            rt.cell(row, "hours"),
            fixed(&nr["observable_hours"], 1),
        );
        d.eq(
            format!("{n} Roster airmass"),
            rt.cell(row, "airm"),
            fixed(&nr["min_airmass"], 2),
        );
        let deg = |v: &Value| match v.as_f64() {
            Some(x) => format!("{x:.0}°"),
            None => "—".into(),
        };
        d.eq(
            format!("{n} Roster Moon"),
            rt.cell(row, "Moon"),
            deg(&nr["moon_separation_deg"]),
        );
        d.eq(
            format!("{n} Roster transit"),
            rt.cell(row, "trans"),
            local_hm(&nr["transit"]),
        );
        d.eq(
            format!("{n} Roster max alt"),
            rt.cell(row, "max"),
            deg(&nr["max_altitude_deg"]),
        );
        d.eq(
            format!("{n} Roster Sun caution"),
            rt.cell(row, "sun") == "☼!",
            !nr["sun_caution"].is_null(),
        );

        // Roster ↔ rung budget --json: progress towards the goal.
        let goal = t.goal_pct.expect("every demo target has a goal");
        let progress = rt.cell(row, "σd/d·goal");
        match (budget_rows.get(n), skipped.get(n)) {
            (Some(b), _) => {
                let a = match b["achievable_pct"].as_f64() {
                    Some(a) if a >= 100.0 => ">99".to_string(),
                    Some(a) => format!("{a:.1}"),
                    None => short(&b["verdict"]),
                };
                let tick = if b["verdict"]["label"] == "reachable" {
                    "✓"
                } else {
                    ""
                };
                let g = goal_text(b["goal_pct"].as_f64().unwrap());
                d.eq(
                    format!("{n} Roster progress"),
                    progress,
                    format!("{a}/{g}%{tick}"),
                );
            }
            (None, Some(_)) => {
                d.eq(
                    format!("{n} Roster progress"),
                    progress,
                    format!("—/{}%", goal_text(goal)),
                );
            }
            (None, None) => d.0.push(format!("{n}: neither in the budget nor skipped")),
        }

        // Tonight view ↔ rung night --json, for the selected target.
        select(&mut s, n);
        ch(&mut s, '2');
        let tonight: Vec<String> = cells(&s, w, h).iter().map(|r| text(r)).collect();
        let line = tonight
            .iter()
            .find(|l| l.trim_start().starts_with("window "))
            .cloned()
            .unwrap_or_default();
        let want = format!(
            "window {} ({} h above {}°) · best {}° airmass {} · Moon {} away",
            want_window.trim_end_matches('+'),
            fixed(&nr["observable_hours"], 1),
            settings.limits.min_alt_deg,
            fixed(&nr["max_altitude_deg"], 0),
            fixed(&nr["min_airmass"], 2),
            deg(&nr["moon_separation_deg"]),
        );
        d.has(format!("{n} Tonight"), &line, &want);
        let ids = tonight
            .iter()
            .find(|l| l.trim_start().starts_with("rise "))
            .cloned()
            .unwrap_or_default();
        d.has(
            format!("{n} Tonight events"),
            &ids,
            &format!(
                "rise {} transit {} set {}",
                local_hm(&nr["rise"]),
                local_hm(&nr["transit"]),
                local_hm(&nr["set"])
            ),
        );

        // The method command ↔ rung budget --json ↔ rung plan --json.
        let m = &methods[n];
        let o = &outcomes[n];
        d.eq(format!("{n} plan goal"), o["goal_pct"].as_f64(), Some(goal));
        match (m, budget_rows.get(n), skipped.get(n)) {
            (Ok(m), Some(b), None) => {
                let epochs = epoch_list(m).len();
                d.eq(
                    format!("{n} {kind} precision vs budget"),
                    &m["distance_precision_pct"],
                    &b["achievable_pct"],
                );
                d.eq(
                    format!("{n} {kind} epochs vs budget"),
                    epochs as u64,
                    b["epochs"].as_u64().unwrap(),
                );
                d.eq(
                    format!("{n} {kind} hours vs budget"),
                    &m["hours_needed"],
                    &b["hours"],
                );
                d.eq(
                    format!("{n} {kind} verdict vs budget"),
                    &m["verdict"],
                    &b["verdict"],
                );
                d.eq(
                    format!("{n} {kind} goal vs budget"),
                    &m["goal_pct"],
                    &b["goal_pct"],
                );
                if kind == "parallax" {
                    // The DCR bias bound and the relative-to-absolute
                    // correction: named, with the same numbers, in the
                    // method's terms and the budget row's.
                    // Exactly: every per-epoch sum (normal matrix, DCR
                    // vector) is made by one function of the parallax
                    // method (src/ladder/parallax/mod.rs, add_epoch).
                    let (mt, bt) = (&m["error_terms"], &b["error_terms"]);
                    let same = match (mt.as_array(), bt.as_array()) {
                        (Some(x), Some(y)) => {
                            x.len() == y.len()
                                && x.iter().zip(y).all(|(p, q)| {
                                    p["name"] == q["name"]
                                        && p["shared"] == q["shared"]
                                        && ["distance_pct", "sigma_mag"]
                                            .iter()
                                            .all(|k| p[*k] == q[*k])
                                })
                        }
                        _ => mt == bt,
                    };
                    if !same {
                        d.0.push(format!("{n} parallax error terms vs budget: {mt} ≠ {bt}"));
                    }
                    // σϖ, σμ, the ϖ–μ correlation and the baseline: keys
                    // of the budget row, the numbers of `rung parallax`
                    // exactly (the same least squares of the same epochs,
                    // each epoch's error evaluated at its night's context
                    // on both paths).
                    for key in [
                        "sigma_parallax_mas",
                        "sigma_pm_masyr",
                        "sigma_pm_ra_masyr",
                        "sigma_pm_dec_masyr",
                        "corr_parallax_pm",
                        "baseline_yr",
                    ] {
                        match (m[key].as_f64(), b[key].as_f64()) {
                            (Some(x), Some(y)) if x == y => {}
                            (x, y) => d.0.push(format!("{n} budget {key}: {y:?} against {x:?}")),
                        }
                    }
                    let plx = m["parallax_mas"].as_f64().unwrap();
                    for (term, mas) in [
                        ("DCR bias bound", m["dcr_bias_mas"].as_f64().map(f64::abs)),
                        (
                            "relative-to-absolute correction",
                            m["absolute_correction_mas"].as_f64(),
                        ),
                    ] {
                        let got = b["error_terms"]
                            .as_array()
                            .unwrap()
                            .iter()
                            .find(|t| t["name"] == term)
                            .and_then(|t| t["distance_pct"].as_f64());
                        match (got, mas) {
                            (Some(g), Some(x)) if g == 100.0 * x / plx => {}
                            (g, x) => d.0.push(format!(
                                "{n} budget {term}: {g:?} % against {x:?} mas of {plx} mas"
                            )),
                        }
                    }
                }
                d.eq(
                    format!("{n} budget verdict_label"),
                    &b["verdict_label"],
                    &b["verdict"]["label"],
                );
                // The plan asks for the budget's epochs and says the budget's verdict.
                d.eq(
                    format!("{n} plan epochs asked vs budget"),
                    &o["requested"],
                    &b["epochs"],
                );
                d.eq(
                    format!("{n} plan verdict vs budget"),
                    &o["goal_verdict"],
                    &b["verdict"],
                );
                if b["epochs"].as_u64() > Some(0) {
                    let exp: f64 = epoch_list(m)
                        .iter()
                        .map(|e| e["exptime_s"].as_f64().unwrap())
                        .sum::<f64>()
                        / epochs as f64;
                    let be = b["exptime_per_epoch_s"].as_f64().unwrap();
                    // Summed in the same order: exact for a parallax.
                    let tol = if kind == "parallax" { 0.0 } else { 1e-9 };
                    if (exp - be).abs() > tol * be.max(1.0) {
                        d.0.push(format!(
                            "{n} exposure per epoch: {kind} {exp} ≠ budget {be}"
                        ));
                    }
                }
                *compared.entry("method↔budget↔plan").or_default() += 1;
            }
            (Err(e), None, Some(why)) => {
                // Refused alike, for the same reason, on every surface.
                d.has(format!("{n} {kind} error"), e, why);
                let notes = o["notes"].to_string();
                d.has(format!("{n} plan notes"), &notes, why);
                *compared.entry("refused alike").or_default() += 1;
            }
            (Ok(m), None, Some(why))
                if kind == "pulsator" && m["distance_precision_pct"].is_null() =>
            {
                // A pulsator no relation applies to: its phases are still
                // planned, its distance refused with the budget's reason.
                d.has(format!("{n} {kind} note"), &m["notes"].to_string(), why);
                let notes = o["notes"].to_string();
                d.has(format!("{n} plan notes"), &notes, why);
                *compared.entry("refused alike").or_default() += 1;
            }
            (m, b, sk) => d.0.push(format!(
                "{n}: method {:?}, budget row {}, skipped {sk:?}",
                m.as_ref().map(|_| "ok"),
                b.is_some()
            )),
        }

        // The method's own night ↔ rung night --json.
        if let Ok(m) = m {
            match kind {
                "parallax" => {
                    if let Some(x) = m["series"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .find(|x| x["night"] == DATE && !x["airmass"].is_null())
                    {
                        // A night the parallax rules use (near the meridian, in the
                        // dark). When the transit is in the night's window, the
                        // instant nearest the meridian is the transit: the same
                        // instant and airmass as the night's best. Otherwise the
                        // method samples its windows every few minutes
                        // (`WINDOW_STEP_S`), so its instant may fall short of the
                        // window's edge, never better than the night's best.
                        let transit_in_window = nr["windows"].as_array().unwrap().iter().any(|w| {
                            w["start"].as_str() <= nr["transit"].as_str()
                                && nr["transit"].as_str() <= w["end"].as_str()
                        });
                        if transit_in_window {
                            d.eq(
                                format!("{n} parallax night airmass"),
                                &x["airmass"],
                                &nr["min_airmass"],
                            );
                            d.eq(
                                format!("{n} parallax night best time"),
                                &x["best_time"],
                                &nr["max_altitude_time"],
                            );
                        } else if x["airmass"].as_f64() < nr["min_airmass"].as_f64() {
                            d.0.push(format!(
                                "{n} parallax night airmass {} better than the night's best {}",
                                x["airmass"], nr["min_airmass"]
                            ));
                        }
                        *compared.entry("method night↔night").or_default() += 1;
                    }
                }
                "pulsator" => {
                    if let Some(x) = m["nights"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .find(|x| x["night"] == DATE)
                    {
                        d.eq(
                            format!("{n} phase night hours"),
                            &x["observable_hours"],
                            &nr["observable_hours"],
                        );
                        d.eq(
                            format!("{n} phase window start"),
                            &x["window_start"],
                            &nr["window_start"],
                        );
                        d.eq(
                            format!("{n} phase window end"),
                            &x["window_end"],
                            &nr["window_end"],
                        );
                        *compared.entry("method night↔night").or_default() += 1;
                    }
                }
                "transient" => {
                    if let Some(x) = m["nights"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .find(|x| x["night"] == DATE && x["usable"] == true)
                    {
                        d.eq(
                            format!("{n} chase night hours"),
                            &x["observable_hours"],
                            &nr["observable_hours"],
                        );
                        d.eq(
                            format!("{n} chase window start"),
                            &x["window_start"],
                            &nr["window_start"],
                        );
                        d.eq(
                            format!("{n} chase window end"),
                            &x["window_end"],
                            &nr["window_end"],
                        );
                        d.eq(
                            format!("{n} chase airmass"),
                            &x["best_airmass"],
                            &nr["min_airmass"],
                        );
                        d.eq(
                            format!("{n} chase Moon"),
                            &x["moon_separation_deg"],
                            &nr["moon_separation_deg"],
                        );
                        *compared.entry("method night↔night").or_default() += 1;
                    }
                }
                _ => {}
            }
        }

        // The method view ↔ the method command.
        ch(&mut s, view_key(kind));
        let view: Vec<String> = cells(&s, w, h).iter().map(|r| text(r)).collect();
        let all = view.join("\n");
        match m {
            Err(e) => {
                let first = e.trim_start_matches("rung: error: ");
                d.has(format!("{n} {kind} view refusal"), &all, first);
            }
            Ok(m) => {
                for want in method_lines(kind, m) {
                    d.has(format!("{n} {kind} view"), &all, &want);
                }
            }
        }
        *compared.entry("UI views").or_default() += 1;
        ch(&mut s, '1');
    }

    // Budget view ↔ rung budget --json, every row and the totals.
    ch(&mut s, '7');
    let bud = cells(&s, w, h);
    let bh = bud
        .iter()
        .position(|r| {
            let t = text(r);
            t.contains("reach") && t.contains("verdict")
        })
        .expect("the Budget view's header");
    let bt = Table::new(
        &bud[bh],
        &[
            "target", ">goal", ">reach", ">epochs", ">exp s", ">hours", "verdict",
        ],
    );
    for (n, b) in &budget_rows {
        let row = row_named(&bud[bh + 1..], n);
        d.eq(
            format!("{n} Budget view goal"),
            bt.cell(row, "goal"),
            format!("{}%", goal_text(b["goal_pct"].as_f64().unwrap())),
        );
        d.eq(
            format!("{n} Budget view reach"),
            bt.cell(row, "reach"),
            match b["achievable_pct"].as_f64() {
                Some(a) => format!("{a:.1}%"),
                None => "—".into(),
            },
        );
        d.eq(
            format!("{n} Budget view epochs"),
            bt.cell(row, "epochs"),
            b["epochs"].to_string(),
        );
        d.eq(
            format!("{n} Budget view exposure"),
            bt.cell(row, "exp s"),
            fixed(&b["exptime_per_epoch_s"], 0),
        );
        d.eq(
            format!("{n} Budget view hours"),
            bt.cell(row, "hours"),
            fixed(&b["hours"], 1),
        );
        let vt = text(row);
        d.has(
            format!("{n} Budget view verdict"),
            &vt,
            b["verdict"]["text"].as_str().unwrap(),
        );
    }
    let all = bud.iter().map(|r| text(r)).collect::<Vec<_>>().join("\n");
    d.has(
        "Budget view total".into(),
        &all,
        &format!(
            "science {} h + calibrations {} h = total {} h clear",
            fixed(&budget["science_hours"], 1),
            fixed(&budget["calibration_hours"], 1),
            fixed(&budget["total_hours_with_calibrations"], 1)
        ),
    );
    d.has(
        "Budget view total with the weather".into(),
        &all,
        &format!(
            "with the weather {} + {} = {} h",
            fixed(&budget["science_hours_expected"], 1),
            fixed(&budget["calibration_hours_expected"], 1),
            fixed(&budget["total_hours_expected"], 1)
        ),
    );
    // Each semester's total (science and calibrations), as the text says it.
    for sem in budget["semesters"].as_array().unwrap() {
        d.has(
            "Budget view semester".into(),
            &all,
            &format!(
                "{} {}",
                sem["label"].as_str().unwrap(),
                fixed(&sem["hours"], 1)
            ),
        );
    }
    d.has(
        "Budget view skipped".into(),
        &all,
        &format!("{} skipped", skipped.len()),
    );

    // ---- The demo's fields (#16): each field is one unit, and `rung phase
    // --field`, its `rung budget` row, its `rung plan` outcome, its Roster
    // row and the Phase view (the library's `Settings::field_report`, which
    // the UI draws) give the same numbers; a star of a field takes the
    // field's metallicity on the command line as in the field's report.
    // The ladder, for the fields' distances on the anchors' zero point.
    let ladder = rung(cfg, &["ladder", "--targets", DEMO, "--json"]).unwrap();
    for f in ["LPO-G1", "LPO-GC1"] {
        let p = rung(cfg, &["phase", "--targets", DEMO, "--field", f, "--json"]).unwrap();
        let (pd, pp, b, o) = (
            &p["distance"],
            &p["prediction"],
            &budget_rows[f],
            &outcomes[f],
        );
        let visits: usize = p["pointings"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x["epochs"].as_array().unwrap().len())
            .sum();
        // rung phase --field ↔ rung budget: the same computation, exactly.
        d.eq(
            format!("{f} phase vs budget precision"),
            &pd["distance_precision_pct"],
            &b["achievable_pct"],
        );
        d.eq(
            format!("{f} phase vs budget hours"),
            &pp["hours_needed"],
            &b["hours"],
        );
        d.eq(
            format!("{f} phase vs budget visits"),
            visits as u64,
            b["epochs"].as_u64().unwrap(),
        );
        d.eq(
            format!("{f} phase vs budget verdict"),
            &pp["verdict"],
            &b["verdict"],
        );
        d.eq(
            format!("{f} phase vs budget goal"),
            &p["goal_pct"],
            &b["goal_pct"],
        );
        d.eq(
            format!("{f} phase vs budget terms"),
            &pd["error_terms"],
            &b["error_terms"],
        );
        // rung plan: asks for the budget's visits and says its verdict; its
        // own precision is that of the visits it placed (their instants
        // rounded to the second), the same to every printed digit.
        d.eq(
            format!("{f} plan visits asked"),
            &o["requested"],
            &b["epochs"],
        );
        d.eq(
            format!("{f} plan verdict"),
            &o["goal_verdict"],
            &b["verdict"],
        );
        d.eq(format!("{f} plan goal"), &o["goal_pct"], &b["goal_pct"]);
        d.eq(
            format!("{f} plan precision"),
            fixed(&o["distance_precision_pct"], 2),
            fixed(&b["achievable_pct"], 2),
        );
        // The Roster's field row: its progress towards the goal.
        let row = row_named(roster_rows, f);
        let tick = if b["verdict"]["label"] == "reachable" {
            "✓"
        } else {
            ""
        };
        d.eq(
            format!("{f} Roster progress"),
            rt.cell(row, "σd/d·goal"),
            format!(
                "{:.1}/{}%{tick}",
                b["achievable_pct"].as_f64().unwrap(),
                goal_text(b["goal_pct"].as_f64().unwrap())
            ),
        );
        // The Phase view of the field.
        ch(&mut s, '1');
        select(&mut s, f);
        ch(&mut s, '5');
        let view: Vec<String> = cells(&s, w, h).iter().map(|r| text(r)).collect();
        let all = view.join("\n");
        d.has(
            format!("{f} Phase view cost"),
            &all,
            &format!(
                "{visits} visits · {} h · {}",
                fixed(&pp["hours_needed"], 1),
                pp["verdict"]["text"].as_str().unwrap()
            ),
        );
        d.has(
            format!("{f} Phase view distance"),
            &all,
            &format!(
                "published zp: μ {} ± {} · {:.1} kpc · σd/d {}%",
                fixed(&pd["distance_modulus_mag"], 3),
                fixed(&pd["sigma_mu_mag"], 3),
                pd["distance_pc"].as_f64().unwrap() / 1000.0,
                fixed(&pd["distance_precision_pct"], 2)
            ),
        );
        d.eq(
            format!("{f} zero point named"),
            pd["zero_point"].as_str(),
            Some("the relation's published zero point"),
        );
        // The distance on the anchors' zero point: rung ladder's node, in
        // rung phase --field and in the Phase view (the ladder's node row
        // and its planned host modulus come from the same fit by two sums:
        // they agree to ~1e-13 mag, far below any printed digit).
        let node = ladder["nodes"]
            .as_array()
            .unwrap()
            .iter()
            .find(|n| n["name"] == f);
        match (node, p["anchored"].is_null()) {
            (Some(n), false) => {
                let a = &p["anchored"];
                for (x, y) in [
                    ("distance_modulus_mag", "modulus_mag"),
                    ("sigma_mu_mag", "sigma_mag"),
                ] {
                    let (u, v) = (a[x].as_f64().unwrap(), n[y].as_f64().unwrap());
                    if (u - v).abs() > 1e-9 {
                        d.0.push(format!("{f} anchored {x} {u} vs ladder {v}"));
                    }
                }
                d.eq(
                    format!("{f} anchored zero point"),
                    &a["zero_point"],
                    &n["zero_point"],
                );
                d.has(
                    format!("{f} Phase view anchored"),
                    &all,
                    &format!(
                        "anchors' zp (rung ladder): μ {} ± {} · ",
                        fixed(&n["modulus_mag"], 3),
                        fixed(&n["sigma_mag"], 3)
                    ),
                );
                *compared.entry("anchored fields").or_default() += 1;
            }
            (None, true) => {
                d.has(
                    format!("{f} Phase view anchored"),
                    &all,
                    "anchors' zp: none",
                );
                d.eq(
                    format!("{f} anchored why"),
                    p["anchored_why"].is_string(),
                    true,
                );
            }
            (n, _) => d.0.push(format!(
                "{f}: ladder node {n:?}, anchored {}",
                p["anchored"]
            )),
        }
        for x in p["stars"].as_array().unwrap() {
            let n = x["name"].as_str().unwrap();
            let line = view
                .iter()
                .find(|l| l.starts_with(n))
                .cloned()
                .unwrap_or_default();
            d.has(
                format!("{n} Phase view μ"),
                &line,
                &format!(
                    "{} {}",
                    fixed(&x["distance_modulus_mag"], 3),
                    fixed(&x["weight"], 3)
                ),
            );
        }
        // A star of the field, asked on its own (the brightest: the faint
        // ones alone need more than a visit may hold): the field's
        // metallicity.
        let star = p["stars"]
            .as_array()
            .unwrap()
            .iter()
            .min_by(|a, b| {
                a["mean_mag"]
                    .as_f64()
                    .partial_cmp(&b["mean_mag"].as_f64())
                    .unwrap()
            })
            .unwrap()["name"]
            .as_str()
            .unwrap();
        let m = rung(
            cfg,
            &["phase", "--targets", DEMO, "--target", star, "--json"],
        )
        .unwrap();
        d.eq(
            format!("{star} [Fe/H] vs its field"),
            &m["feh_dex"],
            &p["feh_dex"],
        );
        d.eq(
            format!("{star} σ[Fe/H] vs its field"),
            &m["feh_err_dex"],
            &p["feh_err_dex"],
        );
        *compared.entry("fields").or_default() += 1;
        ch(&mut s, '1');
    }

    // Plan ↔ rung night --json: tonight's visits lie in tonight's windows.
    for v in plan["plan"]["visits"].as_array().unwrap() {
        if v["night"] != DATE {
            continue;
        }
        let n = v["target"].as_str().unwrap();
        let nr = &night_rows[n];
        let t = |x: &Value| parse_instant(x.as_str().unwrap()).unwrap();
        let inside = nr["windows"].as_array().unwrap().iter().any(|w| {
            t(&w["start"]).seconds_since(&t(&v["start"])) <= 1e-3
                && t(&v["end"]).seconds_since(&t(&w["end"])) <= 1e-3
        });
        if !inside {
            d.0.push(format!(
                "{n} plan visit {} outside tonight's windows",
                v["start"]
            ));
        }
        if v["airmass"].as_f64().unwrap() < nr["min_airmass"].as_f64().unwrap() - 1e-9 {
            d.0.push(format!("{n} plan visit airmass below the night's best"));
        }
        *compared.entry("plan visits tonight").or_default() += 1;
    }

    assert!(
        d.0.is_empty(),
        "{} differences between surfaces:\n{}",
        d.0.len(),
        d.0.join("\n")
    );
    // Every kind of comparison happened (a sweep that compares nothing cannot fail).
    assert_eq!(compared["UI views"], 26, "{compared:?}");
    assert_eq!(
        compared["method↔budget↔plan"] + compared["refused alike"],
        26,
        "{compared:?}"
    );
    assert!(compared["method night↔night"] >= 15, "{compared:?}");
    assert!(compared["plan visits tonight"] >= 5, "{compared:?}");
    assert_eq!(compared["fields"], 2, "{compared:?}");
    assert_eq!(compared["anchored fields"], 1, "LPO-G1: {compared:?}");
}

/// A method command's epochs (a pulsator's are its `visits`).
fn epoch_list(m: &Value) -> Vec<Value> {
    m.get("epochs")
        .or_else(|| m.get("visits"))
        .and_then(|e| e.as_array().cloned())
        .unwrap_or_default()
}

/// A verdict's short form (the Roster's narrow column), from its JSON.
fn short(v: &Value) -> String {
    match v["label"].as_str().unwrap() {
        "reachable" => "reach".into(),
        "floor" => "floor".into(),
        "not_observable" => "unobs".into(),
        _ => {
            let t = v["text"].as_str().unwrap();
            match t
                .strip_prefix("needs ")
                .and_then(|x| x.strip_suffix(" seasons"))
            {
                Some(n) if n.parse::<u32>().is_ok() => format!("{n} seas"),
                _ => "seas".into(),
            }
        }
    }
}

/// The lines a method view writes about what the epochs buy, from the
/// method command's JSON (a parallax: σϖ by term with σμ and the
/// correlation, then the distance, epochs, baseline, hours and verdict).
fn method_lines(kind: &str, m: &Value) -> Vec<String> {
    let pct = |v: &Value, dp: usize| match v.as_f64() {
        Some(x) => format!("{x:.dp$}%"),
        None => "—".into(),
    };
    // A pulsator no relation applies to has no distance and no verdict; the
    // view says why (the note the command gives).
    if kind == "pulsator" && m["verdict"].is_null() {
        return vec!["no distance: ".into()];
    }
    let verdict = m["verdict"]["text"].as_str().unwrap().to_string();
    let epochs = epoch_list(m).len();
    vec![match kind {
        "parallax" => {
            let (sol, base) = match (
                m["sigma_parallax_total_mas"].as_f64(),
                m["sigma_parallax_mas"].as_f64(),
            ) {
                (Some(t), Some(x)) => (
                    format!(
                        "σϖ {t:.2} mas (fit {x:.2}, DCR {:.2}, abs {:.2}) · σμ {:.2} mas/yr · ρ(ϖ,μ) {:+.2}",
                        m["dcr_bias_mas"].as_f64().unwrap().abs(),
                        m["absolute_correction_mas"].as_f64().unwrap(),
                        m["sigma_pm_masyr"].as_f64().unwrap(),
                        m["corr_parallax_pm"].as_f64().unwrap(),
                    ),
                    format!(" over {:.2} yr", m["baseline_yr"].as_f64().unwrap()),
                ),
                _ => (String::new(), String::new()),
            };
            let line = format!(
                "σd/d {} · {epochs} epochs in {} seasons{base} · {} h · {verdict}",
                pct(&m["distance_precision_pct"], 2),
                m["seasons_available"],
                fixed(&m["hours_needed"], 1),
            );
            return [sol, line].into_iter().filter(|l| !l.is_empty()).collect();
        }
        "pulsator" => {
            let floor = match m["floor_pct"].as_f64() {
                Some(_) => format!(
                    " (floor {}, {} pc)",
                    pct(&m["floor_pct"], 2),
                    fixed(&m["distance_pc"], 0)
                ),
                None => String::new(),
            };
            format!(
                "σd/d {}{floor} · {} h · {verdict}",
                pct(&m["distance_precision_pct"], 2),
                fixed(&m["hours_needed"], 1),
            )
        }
        "transient" => format!(
            "σd/d {} (floor {}) · {epochs} epochs · {} h · {}{verdict}",
            pct(&m["distance_precision_pct"], 1),
            pct(&m["floor_pct"], 1),
            fixed(&m["hours_needed"], 1),
            if m["provisional"] == true {
                "provisional, "
            } else {
                ""
            },
        ),
        _ => unreachable!(),
    }]
}
