//! The Chase view's lines under its nights: the summary (σd/d, epochs,
//! hours, verdict) and the notes (the Sun cautions, the provisional state
//! and the chase's notes, as many as two lines hold, `m` for all), and the rows they take from the nights. Apart
//! from the view so that the state's scroll limit (`State::detail_len`)
//! counts the same rows without depending on the view.

use super::fmt::{note_lines, num, pct, wrap};
use crate::ladder::transient::Chase;

/// The line under the nights: σd/d, epochs, hours and the verdict (the
/// words of `rung chase`).
pub fn summary(c: &Chase) -> String {
    let d = &c.design;
    match &d.budget {
        Some(b) => format!(
            "σd/d {} (floor {}) · {} epochs · {} h · {}{}",
            pct(b.distance_precision_pct, 1),
            pct(b.floor_pct, 1),
            d.epochs.len(),
            num(Some(d.hours_needed), 1),
            if c.provisional { "provisional, " } else { "" },
            c.verdict.text()
        ),
        None => format!(
            "{} epochs do not fix the light curve · {}",
            d.epochs.len(),
            c.verdict.text()
        ),
    }
}

/// Everything the chase notes, in the order the view and its notes window
/// (`m`) give it: the Sun cautions (☼), the provisional state, then the
/// chase's notes; and whether the first of them warns.
pub fn items(c: &Chase) -> (Vec<String>, bool) {
    let cl = &c.classification;
    let provisional = c.provisional.then(|| match (cl.night, &cl.spectrum) {
        (Some(n), Some(sp)) => format!(
            "PROVISIONAL until classified: spectrum {} ({:.0} s, {} R {:.0})",
            n.format("%b %d"),
            sp.exptime_s,
            sp.spectrograph,
            sp.resolution
        ),
        _ => "PROVISIONAL until a spectrum from elsewhere classifies it".to_string(),
    });
    let all: Vec<String> = c
        .cautions
        .iter()
        .map(|n| format!("☼ {n}"))
        .chain(provisional)
        .chain(c.notes.iter().cloned())
        .collect();
    let warn = !c.cautions.is_empty() || c.provisional;
    (all, warn)
}

/// The lines under the legend at `width` columns and whether they warn:
/// [`items`] on at most two lines, with the count of the rest and the key
/// that opens them (`m`) when they do not fit.
pub fn note(c: &Chase, width: u16) -> (Vec<String>, bool) {
    let (all, warn) = items(c);
    (note_lines(&all, width as usize, 2), warn)
}

/// Rows the nights give up at `width` columns: one for the summary and one
/// for the note when either needs a second line (each is shown on at most
/// two, "…" ending a longer one).
pub fn extra_rows(c: &Chase, width: u16) -> usize {
    let second = |t: &str| usize::from(wrap(t, width as usize).len() > 1);
    second(&summary(c)) + note(c, width).0.len().saturating_sub(1)
}
