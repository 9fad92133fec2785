//! The Next view shows a visit marked done at its observed start (not its
//! planned one), marked done, with the words `rung next` prints
//! (`rung::plan::now::done_words`); checked on a TestBackend at 80×24.

#[path = "tui_support.rs"]
mod support;

use rung::plan::schedule::Status;
use rung::tui::state::{NextData, View};
use support::*;

#[test]
fn a_visit_marked_done_early_is_shown_at_its_observed_time() {
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any other thread of this test binary reads it.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let (mut s, mut plan) = next_view_with_plan(None);
    let (st, targets) = (s.settings.clone(), demo_targets());
    let now = s.now; // 01:00 UTC, 22:00 local
    // Tonight's first visit planned after now of a target with no other
    // visit tonight, marked done an hour early.
    let tonight = |v: &rung::plan::schedule::Visit| v.night.to_string() == "2026-12-01";
    let alone: Vec<String> = plan
        .visits
        .iter()
        .filter(|v| tonight(v) && v.start > now)
        .filter(|v| {
            plan.visits
                .iter()
                .filter(|w| tonight(w) && w.target == v.target)
                .count()
                == 1
        })
        .map(|v| v.id.clone())
        .collect();
    let v = plan
        .visits
        .iter_mut()
        .filter(|v| alone.contains(&v.id))
        .min_by(|a, b| a.start.partial_cmp(&b.start).unwrap())
        .expect("a visit later tonight, its target's only one");
    let observed = v.start.add_seconds(-3600.0);
    v.status = Status::Done;
    v.observed = Some(observed);
    let (id, target, planned) = (v.id.clone(), v.target.clone(), v.start);
    let q = rung::plan::now::queue(&st, &targets, Some(&plan), now).unwrap();
    let sel = q.rows.iter().position(|r| r.target == target).unwrap();
    let row = &q.rows[sel];
    assert_eq!(row.done_visit_id.as_deref(), Some(id.as_str()));
    assert_eq!(row.done_start, Some(observed));
    s.view = View::Next;
    s.next_sel = sel;
    s.next = Some(NextData {
        at: now,
        queue: Ok(q.clone()),
        plan: Some(plan.clone()),
        note: None,
        refused: None,
    });
    let (rows, _) = screen(&s, 80, 24);
    let tz = &st.site.timezone;
    let local = rung::output::clock_hm(observed, tz);
    assert_ne!(local, rung::output::clock_hm(planned, tz));
    // The row: ✓ done at the observed local time (when the row is on screen).
    let line = row_of(&rows, &format!("✓ done {local}"));
    assert!(line.contains(&target[..target.len().min(11)]), "{line}");
    // The selected row's reasons: the same words as rung next, first.
    let words = rung::plan::now::done_words(plan.visits.iter().find(|v| v.id == id).unwrap(), tz);
    assert!(
        words.contains(&format!(
            "{} UTC",
            rung::output::clock_hm(observed, &chrono_tz::UTC)
        )),
        "{words}"
    );
    assert!(
        has(&rows, &format!("{target}: {words}")),
        "{words:?} not on screen:\n{}",
        rows.join("\n")
    );
}

/// Marking done takes the clock as the visit's start: the prompt says so, in
/// UTC and local time (the words of `rung plan --help`'s --observed: "as
/// observed", "the clock when marking"), and the confirmation names the start.
#[test]
fn the_mark_prompt_and_its_confirmation_name_the_start_taken() {
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any other thread of this test binary reads it.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let (mut s, plan) = next_view_with_plan(None);
    let (st, targets, now) = (s.settings.clone(), demo_targets(), s.now);
    let v = plan.visits[first_planned_tonight(&plan)].clone();
    s.next_prompt = Some((v.id.clone(), "1.2 thin".into()));
    let (rows, _) = screen(&s, 80, 24);
    let tz = &st.site.timezone;
    let (utc, local) = (
        rung::output::clock_hm(now, &chrono_tz::UTC),
        rung::output::clock_hm(now, tz),
    );
    assert_eq!((utc.as_str(), local.as_str()), ("01:00", "22:00"));
    let want =
        format!("visit's start, as observed: the clock when marking, {utc} UTC, {local} local");
    assert!(
        has(&rows, &want),
        "{want:?} not on screen:\n{}",
        rows.join("\n")
    );
    // The words are those of --observed's help.
    let help = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("src/cli/plan.rs"),
    )
    .unwrap();
    assert!(help.contains("as observed") && help.contains("the clock when marking"));
    // Enter marks it: the confirmation names the start taken.
    let path = cfg.path().join("plan.json");
    rung::plan::file::save(&plan, &path).unwrap();
    let d = rung::tui::effects::next_data(&rung::tui::msg::NextJob {
        settings: st.clone(),
        targets: targets.clone(),
        plan_file: Some(path),
        now,
        op: rung::tui::msg::NextOp::Done {
            id: v.id.clone(),
            typed: rung::tui::msg::DoneTyped {
                seeing_arcsec: Some(1.2),
                comment: None,
                // "snr=42" typed (rung::tui::update::done_typed): the primary band's.
                snr_measured: vec![(None, 42.0)],
            },
        },
    });
    let note = d.note.unwrap();
    assert!(
        note.starts_with(&format!("{} done, started {utc} UTC ({local} local)", v.id)),
        "{note}"
    );
    // The visit saved: observed from the clock, with the airmass of the
    // middle of the visit so observed (as `rung plan --done` gives it:
    // tests/plan_log.rs), here within 1e-9 of SOFA apco13's at that instant.
    let done = d
        .plan
        .unwrap()
        .visits
        .into_iter()
        .find(|x| x.id == v.id)
        .unwrap();
    assert_eq!((done.status, done.observed), (Status::Done, Some(now)));
    assert_eq!(
        done.snr_measured.into_iter().collect::<Vec<_>>(),
        vec![(v.exposures[0].band.clone(), 42.0)]
    );
    let mid = now.add_seconds(v.end.seconds_since(&v.start) / 2.0);
    let t = targets.iter().find(|t| t.name == v.target).unwrap();
    let ctx = rung::astro::frames::Context::exact(&st.site, mid).unwrap();
    let want = rung::astro::pointing(&st.site, &ctx, &t.place())
        .airmass
        .unwrap();
    assert!(
        (done.airmass - want).abs() < 1e-9 * want,
        "{}: {} against {want} (planned {})",
        v.id,
        done.airmass,
        v.airmass
    );
}

/// A slip typed when marking done (a signal-to-noise for a band no method
/// takes, a word that is not a number, a seeing out of range) is refused at
/// Enter with the reason, and the prompt stays with what was typed, to mend
/// (tests/plan_snr.rs has the same refusals from `rung plan --done`).
#[test]
fn a_slip_in_the_mark_prompt_keeps_the_prompt() {
    // The methods plan to the end of 2027, so that every kind has a visit.
    let (mut s, plan) = next_view_with_plan(Some("2027-12-31"));
    let of = |kind: &str| {
        plan.visits
            .iter()
            .find(|v| v.kind.as_str() == kind && v.status == Status::Planned)
            .unwrap_or_else(|| panic!("no {kind} visit"))
            .id
            .clone()
    };
    for (id, text, why) in [
        (
            of("transient"),
            "1.1 snr=spectrum=20 cirrus",
            "the signal-to-noise of its spectrum exposure does not enter the distance",
        ),
        (
            of("field"),
            "snr=40",
            "a field's stars each have their own signal-to-noise",
        ),
        (
            of("pulsator"),
            "1.0 snr=lots",
            "'lots' is not a signal-to-noise",
        ),
        (
            of("pulsator"),
            "40 haze",
            "40 arcsec is not within (0, 30] arcsec",
        ),
    ] {
        s.next_prompt = Some((id.clone(), String::new()));
        typed(&mut s, text);
        key(&mut s, crossterm::event::KeyCode::Enter);
        assert_eq!(
            s.next_prompt,
            Some((id.clone(), text.to_string())),
            "{text}"
        );
        let said = s.message.as_ref().map(|m| m.0.clone()).unwrap_or_default();
        assert!(said.contains(why), "{text}: {said}");
    }
}

/// The selected row's "why" is shown whole at 80×24, wrapped onto the lines
/// under the table (it was one line, cut at the 80th column: a done visit's
/// seeing and comment, or most of a Sun caution, were never seen), in the
/// words `rung next` prints (`NowRow::why`), the Sun caution said once (it
/// used to read "SUN CAUTION: SUN CAUTION: ..." here and in `rung next`).
#[test]
fn the_selected_rows_why_is_shown_whole_and_the_sun_caution_once() {
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any other thread of this test binary reads it.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let (mut s, mut plan) = next_view_with_plan(None);
    let (st, targets, now) = (s.settings.clone(), demo_targets(), s.now);
    // A visit of tonight marked done before now, with seeing and a comment.
    let k = first_planned_tonight(&plan);
    let v = &mut plan.visits[k];
    v.status = Status::Done;
    v.observed = Some(now.add_seconds(-1800.0));
    v.seeing_arcsec = Some(1.25);
    v.comment = Some("thin cirrus to the west, wind 12 m/s from the north".into());
    let target = v.target.clone();
    // The words shown under the table, joined where they wrap.
    let why_on_screen = |s: &rung::tui::state::State, target: &str| -> String {
        let (rows, _) = screen(s, 80, 24);
        let at = rows
            .iter()
            .position(|r| r.starts_with(&format!("{target}: ")))
            .unwrap_or_else(|| panic!("no why of {target}:\n{}", rows.join("\n")));
        rows[at..at + 3]
            .iter()
            .map(|r| r.trim_end())
            .collect::<Vec<_>>()
            .join(" ")
    };
    let q = rung::plan::now::queue(&st, &targets, Some(&plan), now).unwrap();
    s.next_sel = q.rows.iter().position(|r| r.target == target).unwrap();
    let why = q.rows[s.next_sel].why();
    assert!(
        why.contains("seeing 1.25″, “thin cirrus to the west"),
        "{why}"
    );
    let full = format!("{target}: {why}");
    assert!(
        full.chars().count() > 80 && full.chars().count() <= 3 * 78,
        "{full}"
    );
    s.next = Some(NextData {
        at: now,
        queue: Ok(q),
        plan: Some(plan.clone()),
        note: None,
        refused: None,
    });
    let shown = why_on_screen(&s, &target);
    assert!(shown.starts_with(&full), "{full}\n{shown}");
    // In daylight: a row with the Sun caution says it once, first.
    let day = rung::astro::time::parse_instant("2026-12-02T16:00:00Z").unwrap();
    let q = rung::plan::now::queue(&st, &targets, Some(&plan), day).unwrap();
    let k = q
        .rows
        .iter()
        .position(|r| r.sun_caution.is_some())
        .expect("a cautioned row in daylight");
    let r = &q.rows[k];
    let why = r.why();
    assert!(why.starts_with("SUN CAUTION: target is "), "{why}");
    assert_eq!(why.matches("SUN CAUTION").count(), 1, "{why}");
    s.next_sel = k;
    let cautioned = r.target.clone();
    s.next = Some(NextData {
        at: day,
        queue: Ok(q),
        plan: Some(plan),
        note: None,
        refused: None,
    });
    let shown = why_on_screen(&s, &cautioned);
    assert!(
        shown.starts_with(&format!("{cautioned}: SUN CAUTION: target is ")),
        "{shown}"
    );
    assert_eq!(shown.matches("SUN CAUTION").count(), 1, "{shown}");
    assert!(
        shown.contains("without the observatory's own safety clearance"),
        "{shown}"
    );
}

/// The index of the first visit planned for tonight (2026-12-01).
fn first_planned_tonight(plan: &rung::plan::file::PlanFile) -> usize {
    (0..plan.visits.len())
        .filter(|k| {
            let v = &plan.visits[*k];
            v.night.to_string() == "2026-12-01" && v.status == Status::Planned
        })
        .min_by(|a, b| {
            plan.visits[*a]
                .start
                .partial_cmp(&plan.visits[*b].start)
                .unwrap()
        })
        .expect("a visit tonight")
}

/// The demo state at 80×24 in the Next view at `test_now()` (01:00 UTC,
/// 22:00 local: the demo site's zone is UTC-3) with a plan of the nights of
/// 2026-12-01 and 02 (its methods planning to `horizon_to` when given), the
/// queue ranked with it.
fn next_view_with_plan(
    horizon_to: Option<&str>,
) -> (rung::tui::state::State, rung::plan::file::PlanFile) {
    let mut s = demo_state((80, 24));
    let st = s.settings.clone();
    let targets = demo_targets();
    let mut st2 = (*st).clone();
    st2.from = "2026-12-01".parse().unwrap();
    st2.to = "2026-12-02".parse().unwrap();
    let mut req = rung::plan::schedule::Request::programme(&st2, &targets, 8.0);
    if let Some(h) = horizon_to {
        req.horizon_to = h.parse().unwrap();
    }
    let sch = rung::plan::schedule::schedule(&req).unwrap();
    let plan = rung::plan::file::PlanFile::new(&st2, &targets, "demo".into(), 8.0, sch.visits);
    let now = test_now();
    let q = rung::plan::now::queue(&st, &targets, Some(&plan), now).unwrap();
    s.now = now;
    s.view = View::Next;
    s.next = Some(NextData {
        at: now,
        queue: Ok(q),
        plan: Some(plan.clone()),
        note: None,
        refused: None,
    });
    (s, plan)
}

/// A mark done from the Next view is confirmed once, whole, at 80 columns:
/// the bottom lines say it (wrapped), and the view does not repeat it (it
/// was said twice, on the view's last line and the message line, both cut
/// at the 80th column before the plan's file name).
#[test]
fn a_mark_done_is_confirmed_once_and_whole_at_80_columns() {
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any other thread of this test binary reads it.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let (mut s, plan) = next_view_with_plan(None);
    let path = cfg.path().join("the plan of the first fortnight.json");
    rung::plan::file::save(&plan, &path).unwrap();
    s.plan_file = Some(path.clone());
    let v = plan.visits[first_planned_tonight(&plan)].clone();
    s.next_prompt = Some((v.id.clone(), String::new()));
    typed(&mut s, "1.2 snr=80 thin cirrus");
    key(&mut s, crossterm::event::KeyCode::Enter);
    assert!(s.next_prompt.is_none());
    let said = s.message.as_ref().map(|m| m.0.clone()).unwrap_or_default();
    let head = format!("{} done, started 01:00 UTC (22:00 local)", v.id);
    assert!(said.starts_with(&head), "{said}");
    assert!(
        said.ends_with(&format!("saved to {} and its log", path.display())),
        "{said}"
    );
    assert!(said.chars().count() > 80, "{said}");
    let (rows, _) = screen(&s, 80, 24);
    let text = rows
        .iter()
        .map(|r| r.trim_end())
        .collect::<Vec<_>>()
        .join(" ");
    assert_eq!(text.matches(&head).count(), 1, "{}", rows.join("\n"));
    assert!(text.contains(&said), "{said}\n{}", rows.join("\n"));
}

/// A mark refused inside the mark itself (here the plan's log cannot be
/// read: a folder stands at its path) writes nothing and gives the prompt
/// back with what was typed, to try again once the cause is mended or to
/// drop with Esc; it used to close the prompt, and the seeing, the
/// signal-to-noise and the comment typed at the telescope were lost.
#[test]
fn a_refused_mark_gives_the_prompt_back_with_what_was_typed() {
    use crossterm::event::KeyCode;
    let dir = tempfile::tempdir().unwrap();
    let (mut s, plan) = next_view_with_plan(None);
    let path = dir.path().join("plan.json");
    rung::plan::file::save(&plan, &path).unwrap();
    s.plan_file = Some(path.clone());
    let log = rung::plan::log::log_path(&path);
    std::fs::create_dir(&log).unwrap();
    let before = std::fs::read(&path).unwrap();
    let v = plan.visits[first_planned_tonight(&plan)].clone();
    s.next_prompt = Some((v.id.clone(), String::new()));
    let text = "1.2 snr=80 thin cirrus, wind 12 m/s";
    typed(&mut s, text);
    key(&mut s, KeyCode::Enter);
    assert_eq!(s.next_prompt, Some((v.id.clone(), text.to_string())));
    let said = s.message.as_ref().map(|m| m.0.clone()).unwrap_or_default();
    assert!(
        said.starts_with("not done: ") && said.contains("Enter tries again, Esc drops it"),
        "{said}"
    );
    assert_eq!(std::fs::read(&path).unwrap(), before);
    // The cause mended, Enter marks it with what was typed.
    std::fs::remove_dir(&log).unwrap();
    key(&mut s, KeyCode::Enter);
    assert!(s.next_prompt.is_none());
    let p = rung::plan::file::load(&path).unwrap();
    let done = p.visit(&v.id).unwrap();
    assert_eq!(done.status, Status::Done);
    assert_eq!(done.seeing_arcsec, Some(1.2));
    assert_eq!(done.comment.as_deref(), Some("thin cirrus, wind 12 m/s"));
    // Refused again and dropped: Esc closes the prompt, nothing marked.
    let w = plan
        .visits
        .iter()
        .find(|x| x.status == Status::Planned && x.id != v.id && x.night == v.night)
        .unwrap()
        .clone();
    // (The plan file holds the first mark: its log can go.)
    std::fs::remove_file(&log).unwrap();
    std::fs::create_dir(&log).unwrap();
    let kept = std::fs::read(&path).unwrap();
    s.next_prompt = Some((w.id.clone(), String::new()));
    typed(&mut s, "0.9");
    key(&mut s, KeyCode::Enter);
    assert_eq!(s.next_prompt, Some((w.id.clone(), "0.9".to_string())));
    key(&mut s, KeyCode::Esc);
    assert!(s.next_prompt.is_none());
    assert_eq!(std::fs::read(&path).unwrap(), kept);
}
