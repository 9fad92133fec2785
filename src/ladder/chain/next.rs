//! What the next hour buys: each step a method offers (one more epoch of a
//! target, one more star of a field, one more calibrator) changes one
//! observation of the chain or adds one; the chain is solved again and the
//! end point's σ compared. Steps are ranked by the fall of the end point's
//! σ_d/d per telescope hour (docs/science.md, The ladder).

use super::model::{Chain, ChainError, EndPoint, Observation, Rung, Term};
use serde::Serialize;

/// What a step does to the chain.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "change", rename_all = "snake_case")]
pub enum Change {
    /// One observation gets new error terms (one more epoch or visit of a
    /// planned target).
    Sharper {
        /// Index of the observation in the chain.
        observation: usize,
        /// Its terms after the step.
        terms: Vec<Term>,
    },
    /// Several observations get new error terms at once (one more visit of
    /// a field: every star its pointings measure gets one more point).
    SharperMany {
        /// Each observation's index in the chain and its terms after the step.
        observations: Vec<(usize, Vec<Term>)>,
    },
    /// Observations more (a new star, calibrator or anchor like those
    /// planned; an anchor brings its parallax and its mean magnitude).
    Added {
        /// The new observations.
        observations: Vec<Observation>,
    },
}

/// A step an observer could take next.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Step {
    /// What it is, in words ("one more epoch of LPO-A1").
    pub label: String,
    /// The rung it serves.
    pub rung: Rung,
    /// The target it observes (or the field it adds a star to).
    pub target: String,
    /// Telescope hours it takes, with overheads.
    pub hours: f64,
    /// What it does to the chain.
    pub change: Change,
}

/// A step with what it buys for the end point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Ranked {
    /// The step.
    #[serde(flatten)]
    pub step: Step,
    /// The end point's σ_d/d before, percent.
    pub before_pct: f64,
    /// After the step, percent.
    pub after_pct: f64,
    /// The fall in σ_d/d per telescope hour, percentage points per hour.
    pub gain_pct_per_hour: f64,
}

impl Chain {
    /// The chain after a step.
    pub fn with_change(&self, change: &Change) -> Chain {
        let mut c = self.clone();
        match change {
            Change::Sharper { observation, terms } => {
                if let Some(o) = c.observations.get_mut(*observation) {
                    o.terms = terms.clone();
                }
            }
            Change::SharperMany { observations } => {
                for (j, terms) in observations {
                    if let Some(o) = c.observations.get_mut(*j) {
                        o.terms = terms.clone();
                    }
                }
            }
            Change::Added { observations } => c.observations.extend(observations.iter().cloned()),
        }
        c
    }
}

/// The relative change of the end point's σ_d/d below which a step is
/// taken to change nothing (our own choice). In the demo's ladder a visit
/// of a host star whose light curve no longer limits its field moved
/// σ_d/d by 5e-15 relative or less (the solution's round-off: 0 for one of
/// them, 1e-14 to 1e-12 %/h for the others), while the smallest real gain,
/// one more light-curve visit of an anchor, moved it by 8e-8; 1e-9 lies
/// between with room on both sides.
pub const SAME_REL: f64 = 1e-9;

/// Rank steps by what one hour of each buys for an end point: the fall of
/// σ_d/d per hour, best first (ties by fewer hours). Steps that take no
/// hours are left out. A step whose chain cannot be solved is an error.
pub fn rank(chain: &Chain, ep: &EndPoint, steps: Vec<Step>) -> Result<Vec<Ranked>, ChainError> {
    let before = chain.end_point(ep)?.distance_pct;
    let mut out = Vec::new();
    for step in steps {
        if !(step.hours.is_finite() && step.hours > 0.0) {
            continue;
        }
        let after = chain.with_change(&step.change).end_point(ep)?.distance_pct;
        // A change within the fit's own round-off is none: a step that
        // leaves the end point as it was gains 0, not 1e-14 %/h one time
        // and 0 the next (the order of such steps is then by hours).
        let fall = before - after;
        let fall = if fall.abs() <= SAME_REL * before.abs() {
            0.0
        } else {
            fall
        };
        out.push(Ranked {
            gain_pct_per_hour: fall / step.hours,
            before_pct: before,
            after_pct: before - fall,
            step,
        });
    }
    out.sort_by(|a, b| {
        b.gain_pct_per_hour
            .total_cmp(&a.gain_pct_per_hour)
            .then(a.step.hours.total_cmp(&b.step.hours))
    });
    Ok(out)
}
