//! The Budget view's request line at 80×24: the hours asked and what they
//! buy, each part whole (the numbers of the library's allocation, as
//! `rung budget --hours` gives them), wrapped between parts as the totals
//! are, never cut inside one.

#[path = "tui_support.rs"]
mod support;

use crossterm::event::KeyCode;
use rung::plan::budget::{Asked, Options, budget_with};
use support::*;

#[test]
fn the_request_line_wraps_between_whole_parts_at_80_columns() {
    let pick = ["LPO-P03", "LPO-P12", "LPO-C03", "LPO-C05", "LPO-T2026a"];
    let targets = demo_subset(&pick);
    let st = demo_settings();
    let b = budget_with(
        &st,
        &targets,
        &Options {
            curves: true,
            asked: Some(Asked {
                hours: Some(2.5),
                ..Default::default()
            }),
            confidence: None,
        },
    )
    .unwrap();
    let a = b.allocation.as_ref().unwrap();
    let n = rung::output::num;
    let parts = [
        format!(
            "{} h asked: {}/{} goals met (weight {}/{})",
            n(a.hours_asked, 1),
            a.goals_met,
            a.goals_total,
            n(a.weight_met, 0),
            n(a.weight_total, 0)
        ),
        format!("{} h left", n(a.hours_left, 1)),
        format!("weather p {}", n(a.probability_all_met, 2)),
        match &a.next {
            Some(x) => format!("at {} h + {}", n(x.hours, 1), x.adds.join(", ")),
            None => "no further goal with more hours".into(),
        },
    ];
    // Longer than a line: it must wrap (the case this test is for).
    assert!(parts.join(" · ").chars().count() > 80, "{parts:?}");
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
    ch(&mut s, 'b');
    typed(&mut s, "2.5");
    key(&mut s, KeyCode::Enter);
    assert!(s.overlay.is_none());
    let (rows, _) = screen(&s, 80, 24);
    // Under the title: the request on two lines, each part whole on one.
    assert!(rows[2].starts_with("Budget · "), "{}", rows[2]);
    let request = [rows[3].trim_end(), rows[4].trim_end()];
    assert!(request[0].starts_with(&parts[0]), "{}", rows.join("\n"));
    for p in &parts {
        assert!(
            request.iter().any(|l| l.contains(p.as_str())),
            "{p:?} not whole in\n{}",
            rows.join("\n")
        );
    }
    // Each line ends at a part's end, and the table's header follows.
    for l in request {
        assert!(parts.iter().any(|p| l.ends_with(p.as_str())), "{l}");
    }
    assert!(
        rows[5].contains("goal") && rows[5].contains("reach") && rows[5].contains("verdict"),
        "{}",
        rows[5]
    );
    // Every target's row is still drawn.
    for t in pick {
        assert!(has(&rows, t), "{t} missing:\n{}", rows.join("\n"));
    }
}

/// The request form names its own field when it refuses one: the reason
/// follows "hours asked", never a command-line option's name (the library's
/// refusals name `--hours` and `--hours-per-semester`, which the form has
/// not got). The form stays open and the budget unchanged.
#[test]
fn the_request_form_refuses_in_its_own_words() {
    let targets = demo_subset(&["LPO-P03", "LPO-C03"]);
    let st = demo_settings();
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
    let cases = [
        (
            "-5",
            "✗ hours asked: -5 is not a number of hours within 0..1000000".to_string(),
        ),
        (
            "2027A=x",
            "✗ hours asked: cannot read '2027A=x': expected H or LABEL=H,LABEL=H".to_string(),
        ),
        (
            "2031A=5",
            format!(
                "✗ hours asked: 2031A is not a semester of the range {} to {}",
                st.from, st.to
            ),
        ),
    ];
    for (text, want) in cases {
        ch(&mut s, 'b');
        typed(&mut s, text);
        key(&mut s, KeyCode::Enter);
        assert!(s.overlay.is_some(), "{text}: the form closed");
        let (rows, _) = screen(&s, 80, 24);
        // The form's lines, inside its frame, joined where they wrap.
        let shown: String = rows
            .iter()
            .filter_map(|r| r.split('│').nth(1).map(str::trim))
            .collect::<Vec<_>>()
            .join(" ");
        assert!(shown.contains(&want), "{text}: {want}\n{}", rows.join("\n"));
        assert!(!shown.contains("--hours"), "{}", rows.join("\n"));
        key(&mut s, KeyCode::Esc);
        assert!(s.overlay.is_none());
    }
    let (rows, _) = screen(&s, 80, 24);
    assert!(rows[3].starts_with("no hours asked"), "{}", rows[3]);
}
