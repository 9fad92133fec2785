//! Which background computations run, and when: the terminal runner's
//! policy, kept here without threads so that it can be tested.
//!
//! Every computing [`Effect`] belongs to a [`Lane`]; a lane runs one job at
//! a time, so a burst of keys never starts a crowd of threads (40 quick night
//! steps used to leave 64 computing threads busy 40 s later).
//!
//! - In the lanes whose jobs answer "what is shown now" (the night table, a
//!   method report, the budget), a newer job supersedes the older ones: the
//!   waiting one is dropped unrun, and the running one is asked to stop
//!   ([`Cancel`]; the budget stops between targets, the others finish and
//!   their result is dropped by the state's generation or key).
//! - Season rows, exports and plans keep every job, in order.
//! - The budget waits while the night table is running or waiting: the
//!   table comes first (the Roster's rows), the budget after. The nights of
//!   the budget's range are built meanwhile, on a thread of their own
//!   (`Effect::Nights`, outside the pool the table's work runs on).
//!
//! The runner (`src/cli/tui.rs`) starts what [`Jobs::submit`] and
//! [`Jobs::finished`] return on threads of their own and hands each result
//! back to `update` as soon as it arrives.

use crate::tui::msg::Effect;
use std::collections::{BTreeMap, VecDeque};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

/// A request to stop a computation that is no longer wanted; computations
/// check it where they can stop cleanly.
#[derive(Debug, Clone, Default)]
pub struct Cancel(Arc<AtomicBool>);

impl Cancel {
    /// Ask the computation to stop.
    pub fn cancel(&self) {
        self.0.store(true, Ordering::Relaxed);
    }

    /// Whether it was asked to stop.
    pub fn is_cancelled(&self) -> bool {
        self.0.load(Ordering::Relaxed)
    }
}

/// The lane of a computing effect: one job at a time in each.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Lane {
    /// The night table (`Effect::Night`).
    Night,
    /// A method report (`Effect::Method`).
    Method,
    /// Season rows (`Effect::Season`).
    Season,
    /// Export files (`Effect::Export`).
    Files,
    /// A plan and its exports (`Effect::ExportPlan`).
    Plan,
    /// The budget (`Effect::Budget`).
    Budget,
    /// The distance ladder (`Effect::Ladder`).
    Ladder,
    /// The range's nights built ahead (`Effect::Nights`); never waits.
    Sky,
}

impl Lane {
    /// The lanes in the order they are started.
    pub const ALL: [Lane; 8] = [
        Lane::Night,
        Lane::Sky,
        Lane::Method,
        Lane::Season,
        Lane::Files,
        Lane::Plan,
        Lane::Budget,
        Lane::Ladder,
    ];

    /// The lane of an effect; `None` for what runs at once, in order (saves,
    /// the unsaved-edits file) and for a batch (split it first).
    pub fn of(e: &Effect) -> Option<Lane> {
        match e {
            Effect::Night(_) => Some(Lane::Night),
            Effect::Method(_) => Some(Lane::Method),
            Effect::Season(_) => Some(Lane::Season),
            Effect::Export(_) | Effect::BudgetExport(_) => Some(Lane::Files),
            Effect::ExportPlan(_) => Some(Lane::Plan),
            Effect::Budget(_) => Some(Lane::Budget),
            Effect::Ladder(_) => Some(Lane::Ladder),
            Effect::Nights(_) => Some(Lane::Sky),
            Effect::Save(_) | Effect::Recovery { .. } | Effect::Next(_) | Effect::Batch(_) => None,
        }
    }

    /// Whether a newer job of this lane supersedes the older ones.
    pub fn supersedes(self) -> bool {
        matches!(
            self,
            Lane::Night | Lane::Method | Lane::Budget | Lane::Ladder | Lane::Sky
        )
    }
}

/// A job to start now.
#[derive(Debug)]
pub struct Start {
    /// Its lane (hand it back to [`Jobs::finished`] when the job ends).
    pub lane: Lane,
    /// What to compute.
    pub effect: Effect,
    /// Set when a newer job supersedes it.
    pub cancel: Cancel,
}

/// The jobs running and waiting, by lane.
#[derive(Debug, Default)]
pub struct Jobs {
    running: BTreeMap<Lane, Cancel>,
    waiting: BTreeMap<Lane, VecDeque<Effect>>,
    /// Jobs dropped unrun because a newer one superseded them.
    pub superseded: usize,
}

impl Jobs {
    /// Take a computing effect (not a save or a batch: see [`Lane::of`]);
    /// the jobs to start now.
    pub fn submit(&mut self, effect: Effect) -> Vec<Start> {
        let Some(lane) = Lane::of(&effect) else {
            debug_assert!(false, "not a computing effect");
            return Vec::new();
        };
        let q = self.waiting.entry(lane).or_default();
        if lane.supersedes() {
            self.superseded += q.len();
            q.clear();
            if let Some(c) = self.running.get(&lane) {
                c.cancel();
            }
        }
        q.push_back(effect);
        self.ready()
    }

    /// A job of `lane` ended (its result handed to `update`); the jobs to
    /// start now.
    pub fn finished(&mut self, lane: Lane) -> Vec<Start> {
        self.running.remove(&lane);
        self.ready()
    }

    /// How many jobs run now.
    pub fn running(&self) -> usize {
        self.running.len()
    }

    /// How many jobs wait.
    pub fn waiting(&self) -> usize {
        self.waiting.values().map(VecDeque::len).sum()
    }

    fn ready(&mut self) -> Vec<Start> {
        let mut out = Vec::new();
        for lane in Lane::ALL {
            if self.running.contains_key(&lane) {
                continue;
            }
            // The table first: the budget waits for the night table.
            if matches!(lane, Lane::Budget | Lane::Ladder)
                && (self.running.contains_key(&Lane::Night)
                    || self
                        .waiting
                        .get(&Lane::Night)
                        .is_some_and(|q| !q.is_empty()))
            {
                continue;
            }
            let Some(effect) = self.waiting.get_mut(&lane).and_then(VecDeque::pop_front) else {
                continue;
            };
            let cancel = Cancel::default();
            self.running.insert(lane, cancel.clone());
            out.push(Start {
                lane,
                effect,
                cancel,
            });
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn export(n: usize) -> Effect {
        Effect::Export(vec![(format!("/nonexistent/{n}").into(), String::new())])
    }

    fn night() -> Effect {
        Effect::Night(Box::new(crate::tui::msg::NightJob {
            site: crate::io::sites::resolve("pampa-lucero").unwrap(),
            date: chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap(),
            limits: crate::astro::night::Limits::new(30.0, -12.0).unwrap(),
            targets: Arc::default(),
            generation: 1,
        }))
    }

    fn budget() -> Effect {
        let st = crate::programme::Settings::resolve(
            &crate::programme::Request::default(),
            crate::astro::time::parse_instant("2026-12-02T01:00:00Z").unwrap(),
        )
        .unwrap();
        Effect::Budget(Box::new(crate::tui::state::BudgetKey {
            settings: Arc::new(st),
            targets: Arc::default(),
            asked: None,
            curves: false,
            file: None,
            first: Vec::new(),
            first_shown: 0,
        }))
    }

    fn nights() -> Effect {
        Effect::Nights(Box::new(crate::tui::state::NightsJob {
            site: crate::io::sites::resolve("pampa-lucero").unwrap(),
            from: chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap(),
            to: chrono::NaiveDate::from_ymd_opt(2026, 12, 3).unwrap(),
        }))
    }

    #[test]
    fn the_budget_waits_for_the_night_table_its_nights_do_not() {
        let mut j = Jobs::default();
        assert_eq!(j.submit(night()).len(), 1);
        let s = j.submit(nights());
        assert_eq!(
            (s.len(), s[0].lane),
            (1, Lane::Sky),
            "built beside the table"
        );
        assert!(j.submit(budget()).is_empty(), "the table first");
        let s = j.finished(Lane::Night);
        assert_eq!(s.len(), 1);
        assert_eq!(s[0].lane, Lane::Budget);
    }

    #[test]
    fn a_burst_keeps_one_job_running_and_one_waiting_per_lane() {
        let mut j = Jobs::default();
        let first = j.submit(budget());
        assert_eq!(first.len(), 1);
        for _ in 0..40 {
            assert!(j.submit(budget()).is_empty());
            assert!(j.submit(night()).len() <= 1);
        }
        // The first budget was asked to stop; 39 budgets and 38 nights never ran.
        assert!(first[0].cancel.is_cancelled());
        assert_eq!(j.superseded, 39 + 38);
        assert_eq!((j.running(), j.waiting()), (2, 2));
        // The running night ends: the newest night starts; the budget still waits.
        let s = j.finished(Lane::Night);
        assert_eq!(s.len(), 1);
        assert_eq!(s[0].lane, Lane::Night);
        assert!(!s[0].cancel.is_cancelled());
        let s = j.finished(Lane::Night);
        assert!(s.is_empty(), "the old budget still runs");
        let s = j.finished(Lane::Budget);
        assert_eq!((s.len(), s[0].lane), (1, Lane::Budget));
        assert!(j.finished(Lane::Budget).is_empty());
        assert_eq!((j.running(), j.waiting()), (0, 0));
    }

    /// The budget's key with the demo programme's targets.
    fn demo_budget_key() -> crate::tui::state::BudgetKey {
        let Effect::Budget(k) = budget() else {
            unreachable!()
        };
        let mut k = *k;
        let demo = concat!(env!("CARGO_MANIFEST_DIR"), "/targets-demo/targets.csv");
        k.targets = Arc::new(
            crate::io::targets::load(std::path::Path::new(demo))
                .unwrap()
                .targets,
        );
        k
    }

    #[test]
    fn a_superseded_budget_stops_and_says_nothing() {
        let k = demo_budget_key();
        let c = Cancel::default();
        c.cancel();
        assert!(crate::tui::effects::budget_until(&k, &c).unwrap().is_none());
        let msgs = crate::tui::effects::run_until(Effect::Budget(Box::new(k)), &c);
        assert!(msgs.is_empty(), "{}", msgs.len());
    }

    #[test]
    fn a_budget_streams_the_figures_its_rows_give_the_first_rows_first() {
        let mut k = demo_budget_key();
        let last = k.targets.len() - 1;
        k.first = vec![last, 0];
        k.first_shown = 2;
        let mut parts = Vec::new();
        let b =
            crate::tui::effects::budget_streaming(&k, &Cancel::default(), &mut |m| parts.push(m))
                .unwrap()
                .unwrap();
        let mut seen = Vec::new();
        for m in &parts {
            let crate::tui::msg::Msg::BudgetPartial(st, figures) = m else {
                panic!("not a partial: {m:?}")
            };
            assert!(crate::tui::state::same_settings(st, &k.settings));
            for (t, f) in figures {
                seen.push(t.name.clone());
                match f {
                    Ok((pct, verdict)) => {
                        let r = b.rows.iter().find(|r| r.target == t.name).unwrap();
                        assert_eq!(r.achievable_pct.to_bits(), pct.to_bits(), "{}", t.name);
                        assert_eq!(&r.verdict, verdict, "{}", t.name);
                    }
                    Err(why) => assert!(
                        b.skipped.iter().any(|(n, w)| *n == t.name && w == why),
                        "{}",
                        t.name
                    ),
                }
            }
        }
        // Every row of a target alone (not in a field) came before the budget.
        for r in b.rows.iter().filter(|r| r.members.is_empty()) {
            assert!(seen.contains(&r.target), "{} not streamed", r.target);
        }
        // Each target computed here came in a message of its own, as it
        // ended (a message of several holds what the memo knew already).
        // The rows asked first (the rows on screen, one batch) came before
        // every other row.
        let firsts: Vec<&String> = k.first.iter().map(|&i| &k.targets[i].name).collect();
        let order: Vec<&String> = parts
            .iter()
            .filter_map(|m| match m {
                crate::tui::msg::Msg::BudgetPartial(_, f) if f.len() == 1 => Some(&f[0].0.name),
                _ => None,
            })
            .collect();
        assert!(!order.is_empty(), "no target streamed on its own");
        if let Some(other) = order.iter().position(|n| !firsts.contains(n)) {
            assert!(
                order[other..].iter().all(|n| !firsts.contains(n)),
                "a row asked first came after another: {order:?}"
            );
        }
    }

    #[test]
    fn exports_keep_every_job_in_order() {
        let mut j = Jobs::default();
        assert_eq!(j.submit(export(1)).len(), 1);
        assert!(j.submit(export(2)).is_empty());
        assert!(j.submit(export(3)).is_empty());
        let path = |s: &[Start]| match &s[0].effect {
            Effect::Export(f) => f[0].0.clone(),
            other => panic!("{other:?}"),
        };
        assert_eq!(
            path(&j.finished(Lane::Files)),
            std::path::Path::new("/nonexistent/2")
        );
        assert_eq!(
            path(&j.finished(Lane::Files)),
            std::path::Path::new("/nonexistent/3")
        );
        assert_eq!(j.superseded, 0);
    }
}
