//! The Ladder view (src/tui/views/ladder.rs) draws the report `rung ladder
//! --json` gives for the same programme and settings, number for number: each
//! rung's distances with own and shared σ, the end point's budget by rung
//! with its largest term, what one more hour on each row buys, and the best
//! next hours (TestBackend at 80×24 and 160×48).

#[path = "tui_support.rs"]
mod support;

use std::process::Command;
use support::{ch, has, row_of, screen, state_with};

fn programme_file() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/ladder_support/programme.csv")
}

/// `rung ARGS` (from the repository, with a configuration folder of its
/// own and the clock at `now` when given): its JSON, the run checked.
fn rung_json(args: &[&str], now: Option<&str>) -> serde_json::Value {
    let cfg = tempfile::tempdir().unwrap();
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_rung"));
    cmd.args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg.path());
    if let Some(t) = now {
        cmd.env("RUNG_NOW", t);
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn n(v: f64, dp: usize) -> String {
    rung::output::fixed(v, dp).unwrap()
}

#[test]
fn the_ladder_view_shows_the_numbers_of_rung_ladder_json() {
    let targets = rung::io::targets::load(&programme_file()).unwrap().targets;
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets,
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        false,
    );
    ch(&mut s, '9');
    assert_eq!(s.view, rung::tui::state::View::Ladder);
    // The same settings on the command line (the UI's: demo site, camera,
    // range and limits).
    let st = &s.settings;
    let j = rung_json(
        &[
            "ladder",
            "--targets",
            programme_file().to_str().unwrap(),
            "--site",
            &st.site.name,
            "--instrument",
            &st.instrument().name,
            "--from",
            &st.from.to_string(),
            "--to",
            &st.to.to_string(),
            "--min-alt",
            &st.limits.min_alt_deg.to_string(),
            "--sun-alt",
            &st.limits.sun_alt_deg.to_string(),
            "--json",
        ],
        None,
    );
    let f = |v: &serde_json::Value| v.as_f64().unwrap();
    for (w, h) in [(80u16, 24u16), (160, 48)] {
        s.size = (w, h);
        let (rows, _) = screen(&s, w, h);
        let text = rows.join("\n");
        assert!(
            rows[2].starts_with(&format!(
                "Ladder · {} to {} · {} · {}",
                st.from,
                st.to,
                st.site.name,
                st.instrument().name
            )),
            "{text}"
        );
        // The end point: H0 with its σ, own and shared.
        let ep = &j["end_point"];
        let h0 = f(&j["h0_km_s_mpc"]);
        let pct = f(&ep["distance_pct"]);
        let k = 100.0 * rung::ladder::DIST_FRAC_PER_MAG;
        let line = row_of(&rows, "End point");
        for want in [
            format!("H0 {} ± {} km/s/Mpc", n(h0, 2), n(h0 * pct / 100.0, 2)),
            format!("σ {}%", n(pct, 2)),
            format!("own {}%", n(k * f(&ep["own_sigma_mag"]), 2)),
            format!("shared {}%", n(k * f(&ep["shared_sigma_mag"]), 2)),
        ] {
            assert!(line.contains(&want), "{want:?} not in {line:?}");
        }
        // Each row of the chain shown: μ, σ, own, shared, σd/d and the
        // gain of one more hour there.
        let shown = rung::tui::state::detail_rows(
            rung::tui::state::View::Ladder,
            h - rung::tui::state::CHROME_ROWS,
        );
        let all: Vec<&serde_json::Value> = j["nodes"]
            .as_array()
            .unwrap()
            .iter()
            .chain(j["supernovae"].as_array().unwrap())
            .collect();
        assert!(shown >= 5 && all.len() > 5);
        // The rows on screen (the view orders them by rung, the JSON lists
        // nodes then supernovae): every one shown is checked, and a full page is.
        // (status, tabs, title, end point and header above the chain)
        let chain = &rows[5..5 + shown];
        let on_screen: Vec<&&serde_json::Value> = all
            .iter()
            .filter(|d| has(chain, &format!(" {} ", d["name"].as_str().unwrap())))
            .collect();
        assert_eq!(on_screen.len(), shown.min(all.len()), "{text}");
        let mut tiny = 0;
        for d in on_screen {
            let name = d["name"].as_str().unwrap();
            let line = row_of(&rows, &format!(" {name} "));
            for want in [
                n(f(&d["modulus_mag"]), 3),
                n(f(&d["sigma_mag"]), 3),
                format!("{}%", n(f(&d["own_pct"]), 2)),
                format!("{}%", n(f(&d["shared_pct"]), 2)),
                format!("{}%", n(f(&d["distance_pct"]), 2)),
            ] {
                assert!(line.contains(&want), "{want:?} not in {line:?}");
            }
            // The best one-more-visit gain of the row's targets.
            let gain = j["marginal"]
                .as_array()
                .unwrap()
                .iter()
                .filter(|m| {
                    m["target"] == d["name"]
                        || (m["node"] == d["name"]
                            && matches!(m["role"].as_str(), Some("anchor" | "host_star")))
                })
                .filter_map(|m| m["gain_pct_per_hour"].as_f64())
                .max_by(f64::total_cmp);
            // A positive gain too small for three decimals reads "<0.001",
            // not "0.000" (which would read as none).
            let want = gain.map_or("—".to_string(), |g| {
                if g > 0.0 && g < 0.0005 {
                    "<0.001".to_string()
                } else {
                    n(g, 3)
                }
            });
            assert!(
                line.trim_end().ends_with(&want),
                "{want:?} at the end of {line:?}"
            );
            tiny += usize::from(want == "<0.001");
        }
        // The demo's anchors gain that little from one more light-curve
        // visit (relation scatter dominates them).
        assert!(tiny > 0, "{text}");
        // The budget by rung: each rung's σd/d and share of the variance.
        let rung_text = |r: &serde_json::Value| match r.as_str().unwrap() {
            "anchor" => "anchors",
            "host" => "host fields",
            "calibrator" => "calibrators",
            "hubble_flow" => "Hubble flow",
            _ => "relation priors",
        };
        for r in ep["by_rung"].as_array().unwrap() {
            let rung = rung_text(&r["rung"]);
            let line = row_of(&rows, &format!("  {rung} "));
            assert!(
                line.contains(&format!("{}%", n(f(&r["distance_pct"]), 2))),
                "{line}"
            );
            assert!(
                line.contains(&format!("{}%", n(100.0 * f(&r["variance_fraction"]), 1))),
                "{line}"
            );
            assert!(line.contains("largest: "), "{line}");
        }
        // The hours by rung, as `rung ladder` counts them (single pulsators
        // on their own), and their sum.
        let hours = row_of(&rows, "Hours: ");
        assert!(hours.trim_end().ends_with(" h"), "cut: {hours:?}");
        let mut total = 0.0;
        for h in j["hours_by_rung"].as_array().unwrap() {
            let rung = rung_text(&h["rung"]);
            total += f(&h["hours"]);
            let want = format!("{rung} {}", n(f(&h["hours"]), 1));
            assert!(hours.contains(&want), "{want:?} not in {hours:?}");
        }
        let ph = f(&j["pulsator_hours"]);
        assert_eq!(
            hours.contains(&format!("pulsators {}", n(ph, 1))),
            ph > 0.0,
            "{hours}"
        );
        assert!(
            hours.contains(&format!("= {} h", n(total + ph, 1))),
            "{hours}"
        );
        // The best next hours, best first, as the command ranks them.
        assert!(has(&rows, "Best next hour"));
        for step in j["next"].as_array().unwrap().iter().take(3) {
            let line = row_of(&rows, step["label"].as_str().unwrap());
            assert!(
                line.contains(&format!(
                    "{} %/h",
                    rung::output::small_gain(f(&step["gain_pct_per_hour"]), 3)
                )),
                "{line}"
            );
            // The σd/d after the step, then the step whole, also at 80
            // columns (the line used to be cut inside its last figure).
            assert!(
                line.contains(&format!("→ {}% in ", n(f(&step["after_pct"]), 2))),
                "{line}"
            );
            assert!(
                line.trim_end().ends_with(step["label"].as_str().unwrap()),
                "{line}"
            );
        }
    }
    // J scrolls the chain (more rows than fit at 80×24).
    s.size = (80, 24);
    ch(&mut s, 'J');
    assert_eq!(s.detail_scroll, 1);
    let (rows, _) = screen(&s, 80, 24);
    let first = j["nodes"][0]["name"].as_str().unwrap();
    assert!(!has(&rows, &format!(" {first} ")), "{}", rows.join("\n"));
}

#[test]
fn an_open_ladder_says_which_link_is_missing() {
    // No anchor: the view says why the chain does not close, as the command does.
    let targets: Vec<_> = rung::io::targets::load(&programme_file())
        .unwrap()
        .targets
        .into_iter()
        .filter(|t| !t.name.starts_with("LPO-A"))
        .collect();
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets,
        None,
        dir.path().join("programme.csv"),
        true,
        (80, 24),
        false,
    );
    ch(&mut s, '9');
    let (rows, _) = screen(&s, 80, 24);
    let text = rows.join(" ");
    assert!(
        text.contains("no ladder: the chain is not closed: relation cepheid V has no anchor"),
        "{}",
        rows.join("\n")
    );
}

#[test]
fn the_uis_ladder_error_names_the_file_line_and_field() {
    // A broken host link: the Ladder view's message is the command's, with
    // the programme's file, the row's line and the field.
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(programme_file())
        .unwrap()
        .replace(",LPO-G1,0.05", ",LPO-G1-C9,0.05");
    let f = dir.path().join("programme.csv");
    std::fs::write(&f, &text).unwrap();
    let line = 1 + text
        .lines()
        .position(|l| l.starts_with("LPO-S2019a"))
        .unwrap();
    let targets = rung::io::targets::load(&f).unwrap().targets;
    let mut s = state_with(targets, Some(f.clone()), f.clone(), false, (80, 24), false);
    ch(&mut s, '9');
    let want = format!(
        "{}, line {line}, field 'host': 'LPO-G1-C9' is not a target in this file: a host names a field of the programme",
        f.display()
    );
    match s.ladder_now() {
        Some(Err(e)) => assert_eq!(e, &want),
        other => panic!("{other:?}"),
    }
    let (rows, _) = screen(&s, 80, 24);
    assert!(has(&rows, "programme.csv, line"), "{}", rows.join("\n"));
}

#[test]
fn the_chase_view_shows_a_calibrators_calibration_as_rung_ladder() {
    // A calibrator already observed: the Chase view gives its host's
    // planned distance and the M_B it calibrates, the numbers of the
    // ladder's calibrator row (tests/ladder_calibrator.rs compares rung
    // chase --json with rung ladder --json).
    let f = programme_file();
    let targets = rung::io::targets::load(&f).unwrap().targets;
    let mut s = state_with(
        targets.clone(),
        Some(f.clone()),
        f.clone(),
        false,
        (80, 24),
        false,
    );
    let i = s
        .order
        .iter()
        .position(|k| s.targets[*k].name == "LPO-S2019a")
        .unwrap();
    s.sel = i;
    ch(&mut s, '6');
    let l = rung::ladder::chain::build(&s.settings, &targets, Some(&f)).unwrap();
    let r = rung::ladder::chain::calibrators_of(&l)
        .into_iter()
        .find(|r| r.target == "LPO-S2019a")
        .unwrap();
    let (rows, _) = screen(&s, 80, 24);
    let all = rows.join("\n");
    assert!(
        has(
            &rows,
            &format!(
                "host LPO-G1 μ {:.3} ± {:.3} mag",
                r.host_mu_mag, r.host_mu_err_mag
            )
        ),
        "{all}"
    );
    assert!(
        has(
            &rows,
            &format!(
                "calibrated M_B {:.3} ± {:.3} mag (host {:.3}, own {:.3})",
                r.peak_abs_mag, r.sigma_mag, r.sigma_host_mag, r.sigma_own_mag
            )
        ),
        "{all}"
    );
}

#[test]
fn single_pulsators_have_their_own_section_in_text_json_and_view() {
    // The demo's stand-alone Cepheids without parallaxes (LPO-C04, C06, C07,
    // C08) are not host galaxies: they are listed as `pulsators`, apart
    // from the host field LPO-G1, in `rung ladder` (text and --json, whose
    // `rung` keeps its old value `host` and whose new `section` and
    // `pulsators` say it) and in the Ladder view; each calibrator's M_B
    // row in the view has the numbers of --json's `calibrators`.
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let targets = rung::io::targets::load(&demo).unwrap().targets;
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with(
        targets,
        Some(demo.clone()),
        demo.clone(),
        false,
        (160, 48),
        false,
    );
    ch(&mut s, '9');
    let st = &s.settings;
    let args = |json: bool| {
        let mut a: Vec<String> = [
            "ladder",
            "--targets",
            demo.to_str().unwrap(),
            "--site",
            &st.site.name,
            "--instrument",
            &st.instrument().name,
            "--from",
            &st.from.to_string(),
            "--to",
            &st.to.to_string(),
            "--min-alt",
            &st.limits.min_alt_deg.to_string(),
            "--sun-alt",
            &st.limits.sun_alt_deg.to_string(),
        ]
        .iter()
        .map(|x| x.to_string())
        .collect();
        if json {
            a.push("--json".into());
        }
        a
    };
    let run = |json: bool| {
        let out = Command::new(env!("CARGO_BIN_EXE_rung"))
            .args(args(json))
            .env("RUNG_CONFIG_DIR", dir.path())
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    };
    let j: serde_json::Value = serde_json::from_str(&run(true)).unwrap();
    let singles = ["LPO-C04", "LPO-C06", "LPO-C07", "LPO-C08"];
    let pulsators: Vec<&str> = j["pulsators"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert_eq!(pulsators, singles);
    for d in j["nodes"].as_array().unwrap() {
        let name = d["name"].as_str().unwrap();
        let want = if singles.contains(&name) {
            "pulsators"
        } else if name == "LPO-G1" {
            "host_fields"
        } else {
            "anchors"
        };
        assert_eq!(d["section"], want, "{name}");
        if want != "anchors" {
            assert_eq!(d["rung"], "host", "{name}: the old key keeps its value");
        }
    }
    let text = run(false);
    for name in singles {
        assert!(
            text.lines()
                .any(|l| l.starts_with(&format!("  pulsators   {name} "))),
            "{text}"
        );
    }
    assert!(text.lines().any(|l| l.starts_with("  host fields LPO-G1 ")));
    assert!(!text.lines().any(|l| l.starts_with("  host fields LPO-C0")));
    let (rows, _) = screen(&s, 160, 48);
    let all = rows.join("\n");
    for name in singles {
        assert!(
            row_of(&rows, &format!(" {name} ")).starts_with("pulsators "),
            "{all}"
        );
    }
    assert!(
        row_of(&rows, " LPO-G1 ").starts_with("host fields "),
        "{all}"
    );
    let c = &j["calibrators"][0];
    let line = row_of(&rows, rung::tui::views::ladder::MB_ROW);
    for want in [
        format!(" {} ", c["target"].as_str().unwrap()),
        n(c["peak_abs_mag"].as_f64().unwrap(), 3),
        n(c["sigma_mag"].as_f64().unwrap(), 3),
        n(c["sigma_own_mag"].as_f64().unwrap(), 3),
        n(c["sigma_host_mag"].as_f64().unwrap(), 3),
    ] {
        assert!(line.contains(&want), "{want:?} not in {line:?}");
    }
}

#[test]
fn single_pulsators_have_their_own_line_in_the_hours_by_rung() {
    // The stand-alone Cepheids (section `pulsators`) keep the rung `host` in
    // the chain's observations; the hours line gives them their own row, so
    // the host rung's hours are the host fields' alone (--json: the new key
    // `pulsator_hours`; `hours_by_rung` keeps its keys).
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let dir = tempfile::tempdir().unwrap();
    let run = |json: bool| {
        let mut a = vec!["ladder", "--targets", demo.to_str().unwrap()];
        if json {
            a.push("--json");
        }
        let out = Command::new(env!("CARGO_BIN_EXE_rung"))
            .args(a)
            .env("RUNG_CONFIG_DIR", dir.path())
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    };
    let j: serde_json::Value = serde_json::from_str(&run(true)).unwrap();
    let singles: Vec<&str> = j["pulsators"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert!(!singles.is_empty());
    let obs = j["observations"].as_array().unwrap();
    let sum = |single: bool| -> f64 {
        obs.iter()
            .filter(|o| o["rung"] == "host")
            .filter(|o| o["node"].as_str().is_some_and(|n| singles.contains(&n)) == single)
            .map(|o| o["hours"].as_f64().unwrap())
            .sum()
    };
    let (singles_h, fields_h) = (sum(true), sum(false));
    assert!(singles_h > 0.0 && fields_h > 0.0);
    let ph = j["pulsator_hours"].as_f64().unwrap();
    assert!((ph - singles_h).abs() < 1e-9, "{ph} {singles_h}");
    let host = j["hours_by_rung"]
        .as_array()
        .unwrap()
        .iter()
        .find(|h| h["rung"] == "host")
        .unwrap();
    assert!(host.get("hours").is_some() && host.get("rung").is_some());
    let host_h = host["hours"].as_f64().unwrap();
    assert!((host_h - fields_h).abs() < 1e-9, "{host_h} {fields_h}");
    // Every observation's hours counted once over the lines.
    let total: f64 = obs.iter().map(|o| o["hours"].as_f64().unwrap()).sum();
    let lines: f64 = j["hours_by_rung"]
        .as_array()
        .unwrap()
        .iter()
        .map(|h| h["hours"].as_f64().unwrap())
        .sum::<f64>()
        + ph;
    assert!((total - lines).abs() < 1e-6, "{total} {lines}");
    let text = run(false);
    assert!(
        text.lines()
            .any(|l| l == format!("  {:<16} {:>7.1} h", "pulsators", ph)),
        "{text}"
    );
}

/// One more visit that leaves the end point as it was gains exactly 0 in
/// `rung ladder --json`, and so reads the same in the view. In the demo's
/// ladder the host stars whose light curves no longer limit their field
/// gained 0 %/h for one of them and 1e-14 to 1e-12 %/h (the fit's
/// round-off, shown "<0.001" beside the other's "0.000") for the rest;
/// a real gain (an anchor's visit, 8e-8 of σ_d/d) stays as it was.
#[test]
fn a_step_that_leaves_the_end_point_as_it_was_gains_zero() {
    let j = rung_json(&["ladder", "--json"], Some("2026-12-02T01:00:00Z"));
    let before = j["end_point"]["distance_pct"].as_f64().unwrap();
    let same = rung::ladder::chain::next::SAME_REL * before;
    let mut zero = Vec::new();
    let mut real = 0;
    for m in j["marginal"]
        .as_array()
        .unwrap()
        .iter()
        .chain(j["next"].as_array().unwrap())
    {
        let (Some(g), Some(h)) = (m["gain_pct_per_hour"].as_f64(), m["hours"].as_f64()) else {
            continue;
        };
        // No gain within the round-off: 0, or a fall above it.
        assert!(g == 0.0 || (g * h).abs() > same, "{m}");
        if g == 0.0 {
            zero.push(m["target"].as_str().unwrap().to_string());
        } else if g * h < 1e-6 * before {
            real += 1;
        }
    }
    assert!(zero.len() >= 3, "{zero:?}");
    // Small real gains are kept (the anchors' light-curve visits).
    assert!(real >= 3, "{real}");
}
