//! The Chase view's lines under its nights: the summary (σd/d, epochs,
//! hours, verdict) and the note (the Sun caution, the provisional state or
//! the chase's first note), and the rows they take from the nights. Apart
//! from the view so that the state's scroll limit (`State::detail_len`)
//! counts the same rows without depending on the view.

use super::fmt::{num, pct, wrap};
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

/// The line under the legend and whether it warns: the Sun caution, else
/// the provisional state, else the chase's first note.
pub fn note(c: &Chase) -> Option<(String, bool)> {
    let cl = &c.classification;
    let provisional = || match (cl.night, &cl.spectrum) {
        (Some(n), Some(sp)) => format!(
            "PROVISIONAL until classified: spectrum {} ({:.0} s, {} R {:.0})",
            n.format("%b %d"),
            sp.exptime_s,
            sp.spectrograph,
            sp.resolution
        ),
        _ => "PROVISIONAL until a spectrum from elsewhere classifies it".to_string(),
    };
    c.cautions
        .first()
        .map(|n| (format!("☼ {n}"), true))
        .or_else(|| c.provisional.then(|| (provisional(), true)))
        .or_else(|| c.notes.first().map(|n| (n.clone(), false)))
}

/// Rows the nights give up at `width` columns: one for the summary and one
/// for the note when either needs a second line (each is shown on at most
/// two, "…" ending a longer one).
pub fn extra_rows(c: &Chase, width: u16) -> usize {
    let second = |t: &str| usize::from(wrap(t, width as usize).len() > 1);
    second(&summary(c)) + note(c).map_or(0, |(t, _)| second(&t))
}
