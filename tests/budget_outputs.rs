//! The budget's proposal outputs on the demo programme: the figure renders
//! (parsed as SVG: a curve per target, the goals-met steps of the JSON, the
//! hours asked), the LaTeX table is well formed, and the justification
//! paragraph names only numbers that the JSON holds.

mod demo_support;

use serde_json::Value;
use std::process::{Command, Output};

fn rung(args: &[&str]) -> Output {
    let cfg = tempfile::tempdir().unwrap();
    Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap()
}

fn demo(extra: &[&str]) -> Output {
    let mut a = vec![
        "budget",
        "--targets",
        "targets-demo/targets.csv",
        "--from",
        "2026-12-01",
        "--to",
        "2028-05-31",
        "--hours",
        "3",
    ];
    a.extend(extra);
    let o = rung(&a);
    assert!(
        o.status.success() || o.status.code() == Some(3),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

/// Every number in a JSON value.
fn numbers(v: &Value, out: &mut Vec<f64>) {
    match v {
        Value::Number(n) => out.extend(n.as_f64()),
        Value::Array(a) => a.iter().for_each(|x| numbers(x, out)),
        Value::Object(o) => o.values().for_each(|x| numbers(x, out)),
        _ => {}
    }
}

/// Every string in a JSON value.
fn strings(v: &Value, out: &mut Vec<String>) {
    match v {
        Value::String(s) => out.push(s.clone()),
        Value::Array(a) => a.iter().for_each(|x| strings(x, out)),
        Value::Object(o) => o.values().for_each(|x| strings(x, out)),
        _ => {}
    }
}

#[test]
fn the_justification_names_only_numbers_in_the_json() {
    let v: Value = serde_json::from_slice(&demo(&["--json"]).stdout).unwrap();
    let text = v["justification"].as_str().unwrap().to_string();
    assert!(
        text.contains("pampa-lucero") && text.contains("lucero-1m"),
        "{text}"
    );
    assert!(text.contains("3.0 h asked"), "{text}");
    // Words that carry digits but are not numbers: names, dates, the
    // weather's source, verdict words. They come from the JSON's strings.
    let mut words = Vec::new();
    let mut others = v.clone();
    others.as_object_mut().unwrap().remove("justification");
    strings(&others, &mut words);
    words.retain(|w| w.chars().any(|c| c.is_ascii_digit()) && w.len() > 2);
    words.sort_by_key(|w| std::cmp::Reverse(w.len()));
    let mut rest = text.clone();
    for w in &words {
        if rest.contains(w.as_str()) {
            rest = rest.replace(w.as_str(), " ");
        }
    }
    let mut nums = Vec::new();
    numbers(&others, &mut nums);
    // Each number left, as printed (its decimals), must be a JSON number so rounded.
    let mut checked = 0;
    for tok in rest.split(|c: char| !(c.is_ascii_digit() || c == '.')) {
        let tok = tok.trim_matches('.');
        if tok.is_empty() || !tok.chars().any(|c| c.is_ascii_digit()) {
            continue;
        }
        let dp = tok.split_once('.').map_or(0, |(_, f)| f.len());
        let found = nums.iter().any(|x| format!("{:.*}", dp, x) == tok)
            || nums.iter().any(|x| format!("{:.*}", dp, x * 100.0) == tok); // a quantile in percent
        assert!(
            found,
            "{tok} in the justification is no number of the JSON:\n{text}"
        );
        checked += 1;
    }
    assert!(checked >= 20, "{checked} numbers checked in:\n{text}");
    // It says which goals fit and why the others do not.
    assert!(text.contains("distance goals are met"), "{text}");
    assert!(text.contains("no number of hours reaches"), "{text}");
    assert!(
        text.contains("would need more hours than are left"),
        "{text}"
    );
}

#[test]
fn the_figure_renders_with_every_curve_and_the_goals_met_steps() {
    let d = tempfile::tempdir().unwrap();
    let svg_path = d.path().join("budget.svg");
    let o = demo(&["--figure", svg_path.to_str().unwrap(), "--json"]);
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains(&format!("rung: figure written to {}", svg_path.display())),
        "{err}"
    );
    let text = std::fs::read_to_string(&svg_path).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("the figure is well-formed XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some("900"));
    // One curve per target with a point beyond zero hours, each a polyline.
    let with_points: Vec<&str> = v["rows"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| {
            r["curve"]
                .as_array()
                .unwrap()
                .iter()
                .any(|p| p["hours"].as_f64().unwrap() > 0.0)
        })
        .map(|r| r["target"].as_str().unwrap())
        .collect();
    let curves: Vec<&str> = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("curve"))
        .map(|n| n.attribute("data-target").unwrap())
        .collect();
    assert_eq!(curves, with_points);
    for n in doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("curve"))
    {
        let poly = n
            .children()
            .find(|c| c.tag_name().name() == "polyline")
            .unwrap();
        let pts = poly.attribute("points").unwrap();
        for xy in pts.split(' ') {
            let (x, y) = xy.split_once(',').unwrap();
            let (x, y): (f64, f64) = (x.parse().unwrap(), y.parse().unwrap());
            assert!(
                (0.0..=900.0).contains(&x) && (0.0..=760.0).contains(&y),
                "{xy}"
            );
        }
    }
    // The goals-met steps are the JSON's.
    let steps: Vec<(f64, f64)> = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("step"))
        .map(|n| {
            (
                n.attribute("data-hours").unwrap().parse().unwrap(),
                n.attribute("data-weight").unwrap().parse().unwrap(),
            )
        })
        .collect();
    let want: Vec<(f64, f64)> = v["allocation"]["steps"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| (s["hours"].as_f64().unwrap(), s["weight"].as_f64().unwrap()))
        .collect();
    // (serde_json reads floats to within an ulp, so compare to 1e-12.)
    assert_eq!(steps.len(), want.len());
    for (a, b) in steps.iter().zip(&want) {
        assert!((a.0 - b.0).abs() < 1e-12 && a.1 == b.1, "{a:?} vs {b:?}");
    }
    assert!(
        doc.descendants()
            .any(|n| n.attribute("class") == Some("asked"))
    );
    assert!(text.contains("3.0 h asked"));
    // Every kind among the rows (fields included) is named in the legend.
    let texts: Vec<&str> = doc
        .descendants()
        .filter(|n| n.tag_name().name() == "text")
        .filter_map(|n| n.text())
        .collect();
    for r in v["rows"].as_array().unwrap() {
        let k = r["kind"].as_str().unwrap();
        assert!(texts.contains(&k), "the legend lacks {k}");
    }
}

#[test]
fn the_latex_table_is_well_formed() {
    let o = demo(&["--latex"]);
    let t = String::from_utf8(o.stdout).unwrap();
    let csv = String::from_utf8(demo(&["--csv"]).stdout).unwrap();
    // (The CSV's rows of kind `total` are the science, the calibrations
    // and the total, as the LaTeX table's.)
    let n_rows = csv.lines().count() - 1;
    assert!(t.contains("\\begin{tabular}") && t.contains("\\end{tabular}"));
    assert_eq!(t.matches('{').count(), t.matches('}').count(), "{t}");
    // A header, a row per target, science, calibrations and total, each
    // ending in \\.
    assert_eq!(t.matches("\\\\\n").count(), n_rows + 1, "{t}");
    let total = csv.lines().last().unwrap();
    assert!(total.starts_with("total,total,"), "{csv}");
    assert!(t.contains("\ncalibrations & "), "{t}");
    // Percent signs are escaped, underscores too.
    for l in t.lines().filter(|l| !l.starts_with('%')) {
        let bare = l.replace("\\%", "");
        assert!(!bare.contains('%'), "{l}");
    }
    assert!(t.contains("out of reach") && t.contains("met"), "{t}");
}

#[test]
fn instruments_side_by_side() {
    let o = demo(&["--instruments", "lucero-1m,alcaravan-2m", "--json"]);
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    let sides = v["side_by_side"].as_array().unwrap();
    assert_eq!(sides.len(), 2);
    assert_eq!(sides[0]["instrument"], "lucero-1m");
    assert_eq!(sides[1]["instrument"], "alcaravan-2m");
    // The first is the budget the top level shows.
    assert_eq!(sides[0]["total_hours"], v["total_hours"]);
    assert_eq!(sides[0]["goals_met"], v["allocation"]["goals_met"]);
    // A 2.2 m telescope needs fewer hours in clear weather for the same goals.
    assert!(sides[1]["total_hours"].as_f64() < sides[0]["total_hours"].as_f64());
    // The 1.0 m cannot expose the faintest pulsator in one visit (skipped); the 2.2 m can.
    let n = |s: &Value| s["rows"].as_array().unwrap().len();
    assert_eq!(n(&sides[0]), v["rows"].as_array().unwrap().len());
    assert_eq!(n(&sides[1]), n(&sides[0]) + 1);
    for s in sides {
        assert!(s["goals_met"].as_u64().unwrap() <= s["goals_reachable"].as_u64().unwrap());
    }
    // The text puts them in one table.
    let o = demo(&["--instruments", "lucero-1m,alcaravan-2m"]);
    let t = String::from_utf8(o.stdout).unwrap();
    assert!(
        t.starts_with("Side by side 2026-12-01 to 2028-05-31"),
        "{t}"
    );
    assert!(t.contains("[2] alcaravan-2m at pampa-lucero"), "{t}");
}

/// `--figure FILE.png` writes the figure as a raster: decoded, it has the
/// SVG's size at the PNG scale, a white background, and along every curve
/// of the SVG (of the same budget) pixels in that curve's colour. Lean: two
/// pulsators and a supernova of the demo over its first season.
#[test]
fn the_png_figure_is_the_svg_figure_as_a_raster() {
    use rung::plan::budget::figure::{HEIGHT, PNG_SCALE, WIDTH};
    let d = tempfile::tempdir().unwrap();
    let prog =
        demo_support::demo_subset(d.path(), "three.csv", &["LPO-C03", "LPO-C06", "LPO-T2026a"]);
    let fig = |name: &str| -> std::path::PathBuf {
        let path = d.path().join(name);
        let o = rung(&[
            "budget",
            "--targets",
            prog.to_str().unwrap(),
            "--from",
            "2026-12-01",
            "--to",
            "2027-07-31",
            "--hours",
            "2",
            "--figure",
            path.to_str().unwrap(),
        ]);
        assert!(
            o.status.success() || o.status.code() == Some(3),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        path
    };
    let png = std::fs::read(fig("budget.png")).unwrap();
    let svg = std::fs::read_to_string(fig("budget.svg")).unwrap();
    let pix = resvg::tiny_skia::Pixmap::decode_png(&png).expect("a PNG that decodes");
    assert_eq!(
        (pix.width(), pix.height()),
        (
            (WIDTH * PNG_SCALE as f64) as u32,
            (HEIGHT * PNG_SCALE as f64) as u32
        )
    );
    let at = |x: f64, y: f64| {
        let p = pix
            .pixel((x * PNG_SCALE as f64) as u32, (y * PNG_SCALE as f64) as u32)
            .unwrap();
        (p.red(), p.green(), p.blue())
    };
    assert_eq!(at(2.0, 2.0), (255, 255, 255), "a white background");
    // Every curve of the SVG: at each of its points, within two pixels, a
    // pixel of its stroke colour (Okabe–Ito, opaque).
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let curves: Vec<_> = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("curve"))
        .collect();
    assert_eq!(curves.len(), 3, "{svg}");
    for c in curves {
        let line = c
            .descendants()
            .find(|n| n.has_tag_name("polyline"))
            .unwrap();
        let hex = line.attribute("stroke").unwrap().trim_start_matches('#');
        let want: Vec<u8> = (0..3)
            .map(|i| u8::from_str_radix(&hex[2 * i..2 * i + 2], 16).unwrap())
            .collect();
        for pt in line.attribute("points").unwrap().split_whitespace() {
            let (x, y) = pt.split_once(',').unwrap();
            let (x, y): (f64, f64) = (x.parse().unwrap(), y.parse().unwrap());
            let near = (-2..=2).any(|dx| {
                (-2..=2).any(|dy| {
                    let (r, g, b) = at(x + dx as f64 * 0.5, y + dy as f64 * 0.5);
                    [r, g, b]
                        .iter()
                        .zip(&want)
                        .all(|(a, w)| (*a as i32 - *w as i32).abs() <= 24)
                })
            });
            assert!(near, "no pixel of #{hex} near ({x}, {y})");
        }
    }
    // A name that is neither .svg nor .png is refused before any work.
    let o = rung(&[
        "budget",
        "--targets",
        prog.to_str().unwrap(),
        "--figure",
        d.path().join("budget.pdf").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2), "{o:?}");
    assert!(
        String::from_utf8_lossy(&o.stderr).contains("ending in .svg or .png"),
        "{o:?}"
    );
}

#[test]
fn an_observed_calibrator_is_no_goal_on_any_surface() {
    // LPO-S2024a is observed already (its peak and the peak's error given):
    // the budget has nothing to plan for it. It is in no row, no goal, no
    // hours, and every output says so in its own line (#18).
    let dir = tempfile::tempdir().unwrap();
    let f = demo_support::demo_subset(
        dir.path(),
        "lean.csv",
        &["LPO-P01", "LPO-G1", "LPO-S2024a", "LPO-T2026a"],
    );
    let run = |extra: &[&str]| {
        let mut a = vec![
            "budget",
            "--targets",
            f.to_str().unwrap(),
            "--site",
            "pampa-lucero",
            "--from",
            "2026-12-01",
            "--to",
            "2027-03-31",
            "--hours",
            "5",
        ];
        a.extend(extra);
        let o = rung(&a);
        assert!(
            o.status.success() || o.status.code() == Some(3),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        String::from_utf8(o.stdout).unwrap()
    };
    let v: Value = serde_json::from_str(&run(&["--json"])).unwrap();
    let rows = v["rows"].as_array().unwrap();
    assert!(rows.iter().all(|r| r["target"] != "LPO-S2024a"));
    let o = &v["observed"][0];
    assert_eq!(o["target"], "LPO-S2024a");
    assert_eq!(o["counted_as_goal"], false);
    assert_eq!(o["serves"], "calibrator");
    assert_eq!(o["host"], "LPO-G1");
    assert_eq!(o["peak_err_mag"], 0.05);
    let a = &v["allocation"];
    assert_eq!(a["goals_total"].as_u64().unwrap() as usize, rows.len());
    assert!(
        a["shares"]
            .as_array()
            .unwrap()
            .iter()
            .all(|s| s["target"] != "LPO-S2024a")
    );
    let line = o["text"].as_str().unwrap();
    assert!(
        line.starts_with("LPO-S2024a: observed (peak 5.60 ± 0.05 mag given), nothing to plan: serves the ladder as a calibrator in LPO-G1"),
        "{line}"
    );
    assert!(line.ends_with(", not counted as a goal"), "{line}");
    let j = v["justification"].as_str().unwrap();
    assert!(
        j.contains("LPO-S2024a is observed already and serves the distance ladder with its measured peak; nothing is planned for it and it is not counted among the goals."),
        "{j}"
    );
    // Text, CSV, Markdown and LaTeX.
    assert!(run(&[]).contains(&format!("  {line}\n")));
    let csv = run(&["--csv"]);
    let r = csv
        .lines()
        .find(|l| l.starts_with("LPO-S2024a,"))
        .expect("its CSV row");
    assert!(r.starts_with("LPO-S2024a,transient,,,,,,observed,"), "{r}");
    assert!(r.contains(",not_a_goal,,,"), "{r}");
    let md = run(&["--markdown"]);
    assert!(
        md.contains("| LPO-S2024a | transient | – | – | – | – | – | – | – | observed: serves the ladder, not a goal | – | – | not a goal |"),
        "{md}"
    );
    let n = rows.len();
    assert!(md.contains(&format!(" of {n} goals met |")), "{md}");
    let tex = run(&["--latex"]);
    assert!(
        tex.contains("LPO-S2024a & transient & -- & -- & -- & -- & -- & -- & observed: serves the ladder, not a goal & -- & not a goal \\\\"),
        "{tex}"
    );
    // The figure draws no curve for it.
    let svg = dir.path().join("f.svg");
    run(&["--figure", svg.to_str().unwrap()]);
    let fig = std::fs::read_to_string(&svg).unwrap();
    assert!(fig.contains("LPO-T2026a") && !fig.contains("LPO-S2024a"));
}
