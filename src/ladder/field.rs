//! Fields: a host galaxy or cluster whose pulsators one pointing serves and
//! whose distance is the weighted mean of theirs.
//!
//! A field is a target of kind `field` (its name, its centre, its goal, and
//! optionally its mean metallicity `feh_dex` ± `feh_err_dex`); its pulsators
//! name it in their `field` column ([`link`]). Models (docs/science.md,
//! Fields; defaults in `config/field.toml`):
//!
//! - **Pointings.** A star is measured in a pointing when its standard
//!   coordinates (ξ, η) about the pointing's centre (the gnomonic projection,
//!   SOFA `tpxes`) lie inside the camera's field of view (`fov_arcmin` of the
//!   instrument, read north up) by at least the photometry's sky annulus. The
//!   field's own pointing, at its centre, serves every star inside it; the
//!   stars outside get pointings of their own, each centred on the outside
//!   star that brings the most other outside stars in ([`pointings`]).
//! - **Exposures.** A visit exposes in each band its stars use, for the
//!   signal-to-noise the plan asks of the faintest star at its faint phase
//!   (mean + amplitude/2), split into as many frames as the brightest star at
//!   its bright phase needs to stay linear; every star's signal-to-noise then
//!   follows from the CCD equation with that exposure and split.
//! - **Cadence.** The visits of a pointing are chosen together for all its
//!   stars and all at once: among instants every `candidate_step_s` inside
//!   the pointing's windows, each costing its own visit's length (its
//!   airmass, its Moon), the set of visits with the most field information
//!   (the sum of the stars' weights 1/(σ_PL² + σm̄²), σm̄ from the Fourier fit
//!   to their phases) per second of telescope time: two starting sets (grown
//!   one visit at a time; the cheapest instant of each equal part of the
//!   span) improved by exchange steps (one visit replaced by another instant
//!   while that raises the whole set's information per second), the better
//!   kept ([`choose_visits`]). A long-period star whose phases are bunched has
//!   a weight near 0, so its missing phases pull the visits apart in time;
//!   the seconds keep them off low or moonlit instants where cheaper ones
//!   reach the same phases.
//! - **Distance.** Each star gives μ_i = m̄_i − M(P_i) − A_i with weight
//!   w_i = 1/(σ_PL² + σ_m̄,i²); the field's μ is the weighted mean, and
//!   σ_μ² = σ_PL²/N + σ_zp² + (γ σ[Fe/H])² + σ_phot² + σ_cal² (+ the
//!   extinction where the band is not reddening-free, + the slope at the
//!   stars' periods), the terms of [`combine`], each an [`ErrorTerm`]; the
//!   relation's zero point and slope are shared by every distance calibrated
//!   on it, and the field's metallicity and its band's photometric
//!   calibration floor σ_cal by all its stars (shared terms: they do not
//!   average down with N).

use crate::astro::bary::{Bjd, bjd_tdb_ctx};
use crate::astro::frames::{CatalogPlace, Context};
use crate::astro::night::{Limits, Night};
use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::astro::{pointing, sun_caution};
use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::pulsator::{
    ClassFrom, MAG_PER_INV_SNR, MAX_RANGE_NIGHTS, PulsatorMethod, Star, StarRelation,
    distance_modulus, frac_phase, mean_mag_sigma,
};
use crate::ladder::{
    BandExposure, DIST_FRAC_PER_MAG, Epoch, ErrorTerm, ExposureModel, Prediction, Verdict,
};
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, HashMap};
use std::path::Path;

/// Defaults of fields (the `[defaults]` table of `config/field.toml`).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct FieldDefaults {
    /// σ[Fe/H] assumed for a field that gives none, dex.
    pub feh_err_dex: f64,
    /// Spacing of candidate visit instants inside a window, seconds.
    pub candidate_step_s: f64,
    /// Most phase points a plan may ask of each star.
    pub max_points: usize,
    /// A goal at or below the field's floor is planned for the floor times this.
    pub floor_margin: f64,
    /// Nights from the range's first in which a pointing's visits are sought
    /// first (the span doubles while they do not fit).
    pub campaign_nights: usize,
}

/// The configuration of fields (`config/field.toml`).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct FieldConfig {
    /// Defaults.
    pub defaults: FieldDefaults,
}

impl Default for FieldConfig {
    fn default() -> Self {
        Self::builtin()
    }
}

impl FieldConfig {
    /// The built-in configuration.
    pub fn builtin() -> Self {
        // The embedded file is checked by the unit test `builtin_config_parses`.
        config::merged(&[config::FIELD.builtin_layer()], Self::validated)
            .unwrap_or_else(|e| panic!("built-in config/field.toml is broken: {e}"))
    }

    /// The built-in configuration with the user's `field.toml` merged over it
    /// key by key, then `extra` (a file named on the command line).
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        config::merged(&config::FIELD.layers(extra)?, Self::validated)
    }

    /// The built-in configuration with `text` (the content of `file`) merged over it.
    pub fn merged(text: &str, file: &Path) -> Result<Self> {
        config::merged(
            &[config::FIELD.builtin_layer(), Layer::new(text, file)],
            Self::validated,
        )
    }

    /// Check every value; a bad one is `RungError::Invalid` naming its dotted key.
    pub fn validated(self) -> Result<Self> {
        let d = &self.defaults;
        if !(d.feh_err_dex.is_finite() && (0.0..=2.0).contains(&d.feh_err_dex)) {
            return Err(RungError::invalid(
                "defaults.feh_err_dex",
                "must be within 0..2 dex",
            ));
        }
        if !(d.candidate_step_s.is_finite() && (60.0..=86_400.0).contains(&d.candidate_step_s)) {
            return Err(RungError::invalid(
                "defaults.candidate_step_s",
                "must be within 60..86400 s",
            ));
        }
        if !(d.floor_margin.is_finite() && d.floor_margin > 1.0 && d.floor_margin <= 2.0) {
            return Err(RungError::invalid(
                "defaults.floor_margin",
                "must be within (1, 2]",
            ));
        }
        if !(1..=2000).contains(&d.campaign_nights) {
            return Err(RungError::invalid(
                "defaults.campaign_nights",
                "must be within 1..2000",
            ));
        }
        if !(7..=2000).contains(&d.max_points) {
            return Err(RungError::invalid(
                "defaults.max_points",
                "must be within 7..2000",
            ));
        }
        Ok(self)
    }
}

// ---------------------------------------------------------------------------
// Links: which targets are fields and which stars belong to them.

/// A field and its stars, as indices into a targets list.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FieldGroup {
    /// The field's own row (kind `field`).
    pub field: usize,
    /// Its pulsators, in list order.
    pub members: Vec<usize>,
}

/// The fields of a targets list ([`link`]).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Links {
    /// Every field, in list order, with its stars.
    pub groups: Vec<FieldGroup>,
    /// Targets whose `field` link is refused, with the reason.
    pub refused: Vec<(usize, String)>,
    /// Target index → index of its group in `groups` (fields and members).
    of: HashMap<usize, usize>,
}

/// What a target is among its programme's fields.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Role<'a> {
    /// Not in any field: planned on its own.
    Alone,
    /// A field.
    Field(&'a FieldGroup),
    /// A star of a field: planned with it.
    Member(&'a FieldGroup),
    /// Its `field` names no field: left out, with the reason.
    Refused(&'a str),
}

impl Links {
    /// The role of the target at index `i`.
    pub fn role(&self, i: usize) -> Role<'_> {
        if let Some((_, why)) = self.refused.iter().find(|(j, _)| *j == i) {
            return Role::Refused(why);
        }
        match self.of.get(&i).map(|g| &self.groups[*g]) {
            Some(g) if g.field == i => Role::Field(g),
            Some(g) => Role::Member(g),
            None => Role::Alone,
        }
    }

    /// The group of the field named `name` in `targets`.
    pub fn by_name<'a>(&'a self, targets: &[Target], name: &str) -> Option<&'a FieldGroup> {
        self.groups.iter().find(|g| targets[g.field].name == name)
    }
}

/// A field's metallicity for its stars: its row's [Fe/H] and σ[Fe/H], the
/// σ assumed (`defaults.feh_err_dex`, config/field.toml) when the row gives
/// [Fe/H] without one. Returns ([Fe/H], σ, whether σ was assumed).
pub fn field_metallicity(field: &Target, cfg: &FieldConfig) -> (Option<f64>, Option<f64>, bool) {
    match (field.feh_dex, field.feh_err_dex) {
        (f, Some(e)) => (f, Some(e), false),
        (Some(f), None) => (Some(f), Some(cfg.defaults.feh_err_dex), true),
        (None, None) => (None, None, false),
    }
}

/// A star's metallicity as its programme gives it, the one rule every
/// surface uses (the field's plan, `rung phase --target` on a star of a
/// field, the ladder): the star's own [Fe/H] when its row gives one; else
/// its field's, with the star's own σ[Fe/H] when given, else the field's
/// ([`field_metallicity`]). Sets `feh_dex`, `feh_err_dex` and says whether
/// the field's [Fe/H] was taken.
pub fn take_field_metallicity(
    feh_dex: &mut Option<f64>,
    feh_err_dex: &mut Option<f64>,
    field: &Target,
    cfg: &FieldConfig,
) -> bool {
    if feh_dex.is_some() {
        return false;
    }
    let (f, e, _) = field_metallicity(field, cfg);
    *feh_dex = f;
    *feh_err_dex = feh_err_dex.or(e);
    f.is_some()
}

/// `star` (a target of `targets`) with its field's metallicity where it
/// gives none of its own ([`take_field_metallicity`]), and a note saying so
/// when taken. A target in no field, or whose field gives no [Fe/H], is
/// returned as it is.
pub fn with_field_metallicity(
    targets: &[Target],
    star: &Target,
    cfg: &FieldConfig,
) -> (Target, Option<String>) {
    let mut t = star.clone();
    let links = link(targets);
    let Some(i) = targets.iter().position(|x| x.name == star.name) else {
        return (t, None);
    };
    let Role::Member(g) = links.role(i) else {
        return (t, None);
    };
    let field = &targets[g.field];
    if !take_field_metallicity(&mut t.feh_dex, &mut t.feh_err_dex, field, cfg) {
        return (t, None);
    }
    let note = format!(
        "[Fe/H] {:+.2} ± {:.2} dex from its field {}{}",
        t.feh_dex.unwrap_or(0.0),
        t.feh_err_dex.unwrap_or(0.0),
        field.name,
        if field_metallicity(field, cfg).2 && star.feh_err_dex.is_none() {
            " (σ assumed, config/field.toml)"
        } else {
            ""
        }
    );
    (t, Some(note))
}

/// Link every pulsator that names a field to it. A `field` that names no
/// target, a target that is not a field, or a target that is not a pulsator
/// is refused with a message that says which and what to do; the target is
/// then left out of every plan (the budget lists it as skipped) while the
/// rest of the list works.
pub fn link(targets: &[Target]) -> Links {
    let mut links = Links::default();
    let mut by_name: HashMap<&str, usize> = HashMap::new();
    for (i, t) in targets.iter().enumerate() {
        by_name.entry(t.name.as_str()).or_insert(i);
        if t.kind == Kind::Field {
            links.of.insert(i, links.groups.len());
            links.groups.push(FieldGroup {
                field: i,
                members: Vec::new(),
            });
        }
    }
    let field_names = || {
        let names: Vec<&str> = links_field_names(targets);
        if names.is_empty() {
            "the list has no field (a target of kind field: its name, centre and goal)".to_string()
        } else {
            format!("its fields are {}", names.join(", "))
        }
    };
    for (i, t) in targets.iter().enumerate() {
        let name = t.field.trim();
        if name.is_empty() {
            continue;
        }
        let quoted = crate::io::kinds::cut(name);
        let refuse = |why: String| (i, format!("field '{quoted}' of target '{}' {why}", t.name));
        if t.kind != Kind::Pulsator {
            links.refused.push(refuse(format!(
                "is refused: only pulsators join a field, and '{}' is a {} target (clear its field)",
                t.name,
                t.kind.as_str()
            )));
            continue;
        }
        match by_name.get(name) {
            None => {
                let near: Vec<String> = targets
                    .iter()
                    .filter(|f| f.kind == Kind::Field && f.name.eq_ignore_ascii_case(name))
                    .map(|f| format!("'{}'", f.name))
                    .collect();
                let hint = if near.is_empty() {
                    field_names()
                } else {
                    format!(
                        "did you mean {}? (names match exactly, case included)",
                        near.join(" or ")
                    )
                };
                links
                    .refused
                    .push(refuse(format!("names no target of this list; {hint}")));
            }
            Some(&f) if targets[f].kind != Kind::Field => {
                links.refused.push(refuse(format!(
                    "names a {} target, not a field; {}",
                    targets[f].kind.as_str(),
                    field_names()
                )));
            }
            Some(&f) => {
                let g = links.of[&f];
                links.groups[g].members.push(i);
                links.of.insert(i, g);
            }
        }
    }
    links
}

fn links_field_names(targets: &[Target]) -> Vec<&str> {
    targets
        .iter()
        .filter(|t| t.kind == Kind::Field)
        .map(|t| t.name.as_str())
        .collect()
}

// ---------------------------------------------------------------------------
// Geometry: which stars a pointing covers.

/// Standard coordinates (ξ toward east, η toward north) of the direction
/// (`ra_deg`, `dec_deg`) about the tangent point (`ra0_deg`, `dec0_deg`), in
/// arcminutes: the gnomonic projection, SOFA `tpxes` (Calabretta & Greisen
/// 2002, A&A 395, 1077; Green, Spherical Astronomy, ch. 13). `None` for a
/// direction 90° or more from the tangent point (it has no image).
pub fn standard_offset_arcmin(
    ra0_deg: f64,
    dec0_deg: f64,
    ra_deg: f64,
    dec_deg: f64,
) -> Option<[f64; 2]> {
    let (xi, eta, status) = sofars::projection::tpxes(
        ra_deg.to_radians(),
        dec_deg.to_radians(),
        ra0_deg.to_radians(),
        dec0_deg.to_radians(),
    );
    let to_arcmin = 180.0 * 60.0 / std::f64::consts::PI;
    (status == 0).then_some([xi * to_arcmin, eta * to_arcmin])
}

/// Whether a star at standard offset `offset_arcmin` (ξ, η) is measured in a
/// pointing with field of view `fov_arcmin` (width along ξ, height along η),
/// read north up: inside the field by at least `margin_arcmin` on every side
/// (the photometry's sky annulus must be on the detector too).
pub fn inside_fov(offset_arcmin: [f64; 2], fov_arcmin: [f64; 2], margin_arcmin: f64) -> bool {
    (0..2).all(|k| offset_arcmin[k].abs() <= fov_arcmin[k] / 2.0 - margin_arcmin)
}

/// One pointing of a field, by index: `centre` is `None` for the field's own
/// pointing (its centre), else the index (into the members given) of the star
/// it is centred on; `stars` are indices into the members, in their order.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PointingIdx {
    /// The member the pointing is centred on; `None`: the field's centre.
    pub centre: Option<usize>,
    /// The members it measures.
    pub stars: Vec<usize>,
}

/// The pointings that measure every member of a field: first the field's own
/// (centred on `field`), holding every member inside the field of view; then,
/// while members remain, a pointing centred on the remaining member that
/// brings the most remaining members inside (the first in order on ties).
/// The field's own pointing is listed even when it holds no star.
pub fn pointings(
    field: &Target,
    members: &[&Target],
    fov_arcmin: [f64; 2],
    margin_arcmin: f64,
) -> Vec<PointingIdx> {
    let covers = |c: (f64, f64), t: &Target| {
        standard_offset_arcmin(c.0, c.1, t.ra_deg, t.dec_deg)
            .is_some_and(|o| inside_fov(o, fov_arcmin, margin_arcmin))
    };
    let centre = (field.ra_deg, field.dec_deg);
    let (inside, mut rest): (Vec<usize>, Vec<usize>) =
        (0..members.len()).partition(|&i| covers(centre, members[i]));
    let mut out = vec![PointingIdx {
        centre: None,
        stars: inside,
    }];
    while !rest.is_empty() {
        let mut best: Option<(usize, Vec<usize>)> = None;
        for &c in &rest {
            let here = (members[c].ra_deg, members[c].dec_deg);
            let got: Vec<usize> = rest
                .iter()
                .copied()
                .filter(|&j| j == c || covers(here, members[j]))
                .collect();
            if best.as_ref().is_none_or(|(_, b)| got.len() > b.len()) {
                best = Some((c, got));
            }
        }
        let Some((c, got)) = best else { break };
        rest.retain(|j| !got.contains(j));
        out.push(PointingIdx {
            centre: Some(c),
            stars: got,
        });
    }
    out
}

// ---------------------------------------------------------------------------
// The field's distance and its terms.

/// One star's part in a field's distance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StarTerms {
    /// Distance modulus μ_i = m̄ − M(P, [Fe/H]) − A, mag.
    pub mu_mag: f64,
    /// The relation's intrinsic scatter for a single star, mag.
    pub scatter_mag: f64,
    /// Error of the star's mean magnitude from its points, mag.
    pub sigma_mean_mag: f64,
    /// The relation the star's distance uses (class and band), for the shared terms.
    pub relation: String,
    /// The relation's zero-point error, mag (shared).
    pub zero_point_err_mag: f64,
    /// The relation's slope error, mag per dex of period (shared).
    pub slope_err_mag_per_dex: f64,
    /// log10 P − the relation's pivot: the star's lever arm on the slope.
    pub log_p_lever: f64,
    /// The relation's metallicity coefficient γ, mag per dex.
    pub gamma_mag_per_dex: f64,
    /// The error of γ, mag per dex (shared).
    pub gamma_err_mag_per_dex: f64,
    /// [Fe/H] − the relation's reference: the star's lever arm on γ's error.
    pub feh_lever_dex: f64,
    /// The uncertainty of the field's [Fe/H] used for the star, dex (common
    /// to the field's stars).
    pub feh_err_dex: f64,
    /// Foreground extinction in the star's band, mag (0 for a reddening-free index).
    pub extinction_mag: f64,
    /// The photometric band of the star's relation ("V", "W_VI"): the stars
    /// of one band share its calibration.
    pub calibration_band: String,
    /// The band's photometric calibration floor, mag (config/pulsator.toml
    /// `[calibration_floor_mag]`): every point of the band is calibrated the
    /// same way, so it is common to the field's stars (shared).
    pub calibration_floor_mag: f64,
}

/// Field-wide inputs of [`combine`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FieldWide {
    /// Uncertainty of the extinction as a fraction of it.
    pub extinction_sigma_frac: f64,
}

/// A field's distance from its stars.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FieldDistance {
    /// Stars that count.
    pub n_stars: usize,
    /// The weighted mean distance modulus, mag.
    pub distance_modulus_mag: f64,
    /// Distance, parsecs: 10^(μ/5 + 1).
    pub distance_pc: f64,
    /// σ_μ, mag: the terms in quadrature.
    pub sigma_mu_mag: f64,
    /// σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// σ_d/d with perfect mean magnitudes (the relation's scatter over N and
    /// the field-wide terms), percent: what no number of points can beat.
    pub floor_pct: f64,
    /// Each star's share of the mean (the weights normalised to 1), in input order.
    pub weights: Vec<f64>,
    /// The error budget by term.
    pub error_terms: Vec<ErrorTerm>,
    /// Which zero point the modulus stands on: [`ZERO_POINT_PUBLISHED`] (the
    /// relation's, from its source in config/pulsator.toml).
    pub zero_point: String,
}

/// A field's modulus on the relation's published zero point (its source in
/// config/pulsator.toml, its error the "relation zero point" term).
pub const ZERO_POINT_PUBLISHED: &str = "the relation's published zero point";
/// A modulus on the zero point the programme's anchors fix (their
/// parallaxes, through the ladder's joint fit: `rung ladder`).
pub const ZERO_POINT_ANCHORED: &str = "the zero point the programme's anchors fix (rung ladder)";

/// A field's distance with the zero point the programme's anchors fix, as
/// `rung ladder` gives it (`ladder::chain::build`'s planned host moduli):
/// shown beside the field's own distance on the published zero point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnchoredDistance {
    /// Distance modulus, mag.
    pub distance_modulus_mag: f64,
    /// Its σ, mag (the anchors' parallaxes and the chain's shared terms in
    /// place of the published zero point's error).
    pub sigma_mu_mag: f64,
    /// Distance, parsecs: 10^(μ/5 + 1).
    pub distance_pc: f64,
    /// σ_d/d, percent.
    pub distance_precision_pct: f64,
    /// [`ZERO_POINT_ANCHORED`].
    pub zero_point: String,
}

/// The weighted mean of the stars' distance moduli and its error budget.
///
/// Weights w_i = 1/(s_i² + σ_m̄,i²), W = Σ w_i. The terms (mag; in
/// quadrature they are the standard error of the weighted mean when the
/// stars' own errors are independent and the field-wide ones are common):
/// - period–luminosity scatter: √(Σ w_i² s_i²)/W (σ_PL/√N for equal stars);
/// - mean magnitudes: √(Σ w_i² σ_m̄,i²)/W (σ_phot);
/// - relation zero point (shared): √Σ_r (Σ_{i∈r} w_i σ_zp,r / W)² over the
///   relations r used (independent of each other);
/// - relation slope at the stars' periods (shared): the same with
///   (log P_i − pivot) σ_a,r;
/// - relation γ at the stars' [Fe/H] (shared): the same with
///   ([Fe/H]_i − reference) σ_γ,r;
/// - metallicity (shared): |Σ w_i γ_i σ[Fe/H]_i| / W (the field's one
///   metallicity: its error is common to its stars and does not average down);
/// - extinction: f Σ w_i A_i / W (one reddening for the field, f its
///   fractional error; A_i = 0 in a reddening-free index);
/// - calibration (shared): √Σ_b (Σ_{i∈b} w_i f_b / W)² over the bands b
///   used, f_b the band's photometric calibration floor (one calibration
///   for every star measured in the band; independent between bands).
///
/// `None` without a star. Source: the weighted mean with common errors
/// (e.g. Taylor, An Introduction to Error Analysis, 2nd ed., ch. 7 and 9;
/// common practice); docs/science.md, Fields.
pub fn combine(stars: &[StarTerms], wide: &FieldWide) -> Option<FieldDistance> {
    if stars.is_empty() {
        return None;
    }
    let w: Vec<f64> = stars
        .iter()
        .map(|s| 1.0 / (s.scatter_mag.powi(2) + s.sigma_mean_mag.powi(2)).max(1e-12))
        .collect();
    let sum_w: f64 = w.iter().sum();
    let avg = |f: &dyn Fn(&StarTerms) -> f64| -> f64 {
        stars.iter().zip(&w).map(|(s, w)| w * f(s)).sum::<f64>() / sum_w
    };
    let quad = |f: &dyn Fn(&StarTerms) -> f64| -> f64 {
        stars
            .iter()
            .zip(&w)
            .map(|(s, w)| (w * f(s)).powi(2))
            .sum::<f64>()
            .sqrt()
            / sum_w
    };
    // Shared within a relation, independent between relations.
    let per_relation = |f: &dyn Fn(&StarTerms) -> f64| -> f64 {
        let mut by: BTreeMap<&str, f64> = BTreeMap::new();
        for (s, w) in stars.iter().zip(&w) {
            *by.entry(s.relation.as_str()).or_default() += w * f(s) / sum_w;
        }
        by.values().map(|v| v * v).sum::<f64>().sqrt()
    };
    let mu = avg(&|s| s.mu_mag);
    let scatter = quad(&|s| s.scatter_mag);
    let phot = quad(&|s| s.sigma_mean_mag);
    let zero_point = per_relation(&|s| s.zero_point_err_mag);
    let slope = per_relation(&|s| s.log_p_lever * s.slope_err_mag_per_dex);
    let gamma_err = per_relation(&|s| s.feh_lever_dex * s.gamma_err_mag_per_dex);
    // Shared within a band, independent between bands.
    let calibration = {
        let mut by: BTreeMap<&str, f64> = BTreeMap::new();
        for (s, w) in stars.iter().zip(&w) {
            *by.entry(s.calibration_band.as_str()).or_default() +=
                w * s.calibration_floor_mag / sum_w;
        }
        by.values().map(|v| v * v).sum::<f64>().sqrt()
    };
    let metallicity = avg(&|s| s.gamma_mag_per_dex * s.feh_err_dex).abs();
    let extinction = wide.extinction_sigma_frac * avg(&|s| s.extinction_mag);
    let n = stars.len();
    let terms = vec![
        ErrorTerm::from_mag(
            format!("period–luminosity scatter over {n} star(s)"),
            scatter,
            false,
        ),
        ErrorTerm::from_mag("mean magnitudes", phot, false),
        ErrorTerm::from_mag("relation zero point", zero_point, true),
        ErrorTerm::from_mag("relation slope at the stars' periods", slope, true),
        ErrorTerm::from_mag("relation γ at the stars' [Fe/H]", gamma_err, true),
        ErrorTerm::from_mag("metallicity", metallicity, true),
        ErrorTerm::from_mag("extinction", extinction, false),
        ErrorTerm::from_mag("calibration", calibration, true),
    ];
    let sigma: f64 = terms
        .iter()
        .map(|t| t.sigma_mag.powi(2))
        .sum::<f64>()
        .sqrt();
    // The floor: perfect mean magnitudes (weights 1/s_i²).
    let floor = if stars.iter().any(|s| s.sigma_mean_mag > 0.0) {
        let perfect: Vec<StarTerms> = stars
            .iter()
            .map(|s| StarTerms {
                sigma_mean_mag: 0.0,
                ..s.clone()
            })
            .collect();
        combine(&perfect, wide).map_or(f64::NAN, |d| d.floor_pct)
    } else {
        100.0 * DIST_FRAC_PER_MAG * sigma
    };
    Some(FieldDistance {
        n_stars: n,
        distance_modulus_mag: mu,
        distance_pc: 10f64.powf(mu / 5.0 + 1.0),
        sigma_mu_mag: sigma,
        distance_precision_pct: 100.0 * DIST_FRAC_PER_MAG * sigma,
        floor_pct: floor,
        weights: w.iter().map(|x| x / sum_w).collect(),
        error_terms: terms,
        zero_point: ZERO_POINT_PUBLISHED.to_string(),
    })
}

// ---------------------------------------------------------------------------
// Planning a field.

/// Where and when a field may be observed: the field, its stars and the
/// programme's site, range and limits.
#[derive(Debug, Clone)]
pub struct FieldSetting<'a> {
    /// The site.
    pub site: &'a Site,
    /// The field's own row (kind `field`).
    pub field: &'a Target,
    /// Its pulsators.
    pub members: Vec<&'a Target>,
    /// First night of the range.
    pub from: NaiveDate,
    /// Last night of the range, inclusive.
    pub to: NaiveDate,
    /// Altitude and Sun limits of windows.
    pub limits: Limits,
    /// The goal σ_d/d, percent (the field's, else the programme's).
    pub goal_pct: Option<f64>,
}

impl<'a> FieldSetting<'a> {
    /// The setting of the field `g` of `targets` at `site` over `from`..`to`
    /// under `limits`, with its goal: its own `goal_pct`, else the
    /// programme's `programme_goal_pct`.
    #[allow(clippy::too_many_arguments)]
    pub fn of(
        site: &'a Site,
        targets: &'a [Target],
        g: &FieldGroup,
        from: NaiveDate,
        to: NaiveDate,
        limits: Limits,
        programme_goal_pct: Option<f64>,
    ) -> Self {
        let field = &targets[g.field];
        FieldSetting {
            site,
            field,
            members: g.members.iter().map(|i| &targets[*i]).collect(),
            from,
            to,
            limits,
            goal_pct: field.goal_pct.or(programme_goal_pct),
        }
    }
}

/// One star of a field in its report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FieldStar {
    /// Name.
    pub name: String,
    /// Index of the pointing that measures it (into `pointings`), if any.
    pub pointing: Option<usize>,
    /// Standard offset from the field's centre (ξ east, η north), arcmin.
    pub offset_arcmin: Option<[f64; 2]>,
    /// Period, days.
    pub period_d: f64,
    /// Band.
    pub band: String,
    /// Mean magnitude, mag.
    pub mean_mag: Option<f64>,
    /// Peak-to-peak amplitude, mag.
    pub amplitude_mag: f64,
    /// Phase points it gets.
    pub points: usize,
    /// Distinct phase bins (of `bins`) its points fall in.
    pub bins_covered: usize,
    /// Lowest per-point signal-to-noise among its points (at its faint phase).
    pub snr_lowest: Option<f64>,
    /// Error of its mean magnitude, mag.
    pub sigma_mean_mag: Option<f64>,
    /// Its distance modulus, mag.
    pub distance_modulus_mag: Option<f64>,
    /// Its share of the field's mean, 0–1.
    pub weight: f64,
    /// Why it does not count in the field's distance, when it does not.
    pub excluded: Option<String>,
}

/// One pointing of a field with its visits.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PointingPlan {
    /// The target the pointing is centred on (the field, or the star of an
    /// outside pointing); its visits carry this name in a plan.
    pub target: String,
    /// Centre, ICRS degrees.
    pub ra_deg: f64,
    /// Centre, ICRS degrees.
    pub dec_deg: f64,
    /// The stars it measures.
    pub stars: Vec<String>,
    /// The faintest of them at its faint phase (what the exposure is sized for).
    pub faintest: Option<String>,
    /// Its magnitude at the faint phase, mag.
    pub faintest_mag: Option<f64>,
    /// The brightest at its bright phase (what the frames are split for).
    pub brightest: Option<String>,
    /// Its magnitude at the bright phase, mag.
    pub brightest_mag: Option<f64>,
    /// The visits.
    pub epochs: Vec<Epoch>,
    /// Telescope hours with overheads.
    pub hours: f64,
}

/// Everything a field's plan says (`rung phase --field`, the Phase view, the budget's row).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FieldReport {
    /// The field's name.
    pub field: String,
    /// Its centre, ICRS degrees.
    pub ra_deg: f64,
    /// Its centre, ICRS degrees.
    pub dec_deg: f64,
    /// The camera's field of view (width along RA, height along Dec), arcmin.
    pub fov_arcmin: [f64; 2],
    /// How far inside the edges a star must be, arcsec (the sky annulus).
    pub margin_arcsec: f64,
    /// The field's mean metallicity, dex, when given.
    pub feh_dex: Option<f64>,
    /// σ[Fe/H] of the field used for its stars, dex (none: each star's
    /// class default, said in the notes).
    pub feh_err_dex: Option<f64>,
    /// Whether σ[Fe/H] is the configured default (the field gave [Fe/H]
    /// without its error).
    pub feh_err_assumed: bool,
    /// The goal, percent.
    pub goal_pct: Option<f64>,
    /// Phase points planned per star (one per visit of its pointing).
    pub points_per_star: usize,
    /// Phase bins the cadence spreads them over.
    pub bins: usize,
    /// Per-point signal-to-noise asked of each pointing's faintest star.
    pub snr_faintest: f64,
    /// The pointings, the field's own first.
    pub pointings: Vec<PointingPlan>,
    /// Every star, in the list's order.
    pub stars: Vec<FieldStar>,
    /// The field's distance and its terms, when a star counts.
    pub distance: Option<FieldDistance>,
    /// Precision, hours and verdict of the whole field (every pointing).
    pub prediction: Prediction,
    /// Safety cautions (Sun proximity).
    pub cautions: Vec<String>,
    /// Warnings and explanations.
    pub notes: Vec<String>,
    /// The field's distance on the zero point the programme's anchors fix
    /// (`rung ladder`'s), when they fix its relation
    /// (`ladder::chain::anchor_field`); `None` from the field's plan alone.
    pub anchored: Option<AnchoredDistance>,
    /// Why there is no anchored distance, when asked for one and none is.
    pub anchored_why: Option<String>,
}

impl FieldReport {
    /// The visits asked of the target named `name` (the field, or a star an
    /// outside pointing is centred on); empty for any other.
    pub fn epochs_of(&self, name: &str) -> Vec<Epoch> {
        self.pointings
            .iter()
            .filter(|p| p.target == name)
            .flat_map(|p| p.epochs.iter().cloned())
            .collect()
    }
}

/// A star of a field ready to plan.
struct Member {
    /// Index into the setting's members.
    idx: usize,
    star: Star,
    rel: StarRelation,
    faint_mag: f64,
    bright_mag: f64,
}

/// A field resolved for planning: its stars, pointings and field-wide terms.
struct Prepared {
    members: Vec<Option<Member>>,
    excluded: Vec<Option<String>>,
    offsets: Vec<Option<[f64; 2]>>,
    pointings: Vec<PointingIdx>,
    fov: [f64; 2],
    margin_arcsec: f64,
    wide: FieldWide,
    feh_err_dex: Option<f64>,
    feh_assumed: bool,
    notes: Vec<String>,
}

/// Plans fields with the pulsating-star method's coefficients and the
/// fields' own configuration.
#[derive(Debug, Clone, Copy)]
pub struct FieldPlanner<'a> {
    /// The pulsating-star method (relations, bins, harmonics, SNR limits).
    pub pulsator: &'a PulsatorMethod,
    /// The fields' configuration.
    pub config: &'a FieldConfig,
}

/// A candidate visit instant.
#[derive(Debug, Clone, Copy)]
struct Candidate {
    t: Instant,
    bjd: Bjd,
    /// Seconds from the night's highest altitude (ties go to the smaller).
    from_best_s: f64,
}

/// The observable windows of a place over the nights, with candidate instants
/// every `step_s` for a visit of `dwell_s` centred on them.
fn candidates(
    site: &Site,
    place: &CatalogPlace,
    nights: &[std::sync::Arc<Night>],
    limits: &Limits,
    dwell_s: f64,
    step_s: f64,
) -> Vec<Candidate> {
    use rayon::prelude::*;
    let per: Vec<Vec<Candidate>> = nights
        .par_iter()
        .map(|night| {
            let tn = night.windows(place, limits);
            let best = tn.max_altitude_time;
            let mut out = Vec::new();
            for (a, b) in &tn.windows {
                let len = b.seconds_since(a);
                if len < dwell_s {
                    continue;
                }
                let ba = bjd_tdb_ctx(site, &night.context_without_moon(*a), place);
                let bb = bjd_tdb_ctx(site, &night.context_without_moon(*b), place);
                let db = (bb.jd1 - ba.jd1) + (bb.jd2 - ba.jd2);
                let mut x = dwell_s / 2.0;
                while x <= len - dwell_s / 2.0 + 1e-6 {
                    let t = a.add_seconds(x);
                    out.push(Candidate {
                        t,
                        // BJD is linear in UTC across a night to far better
                        // than a second (see pulsator::coverage).
                        bjd: Bjd {
                            jd1: ba.jd1,
                            jd2: ba.jd2 + db * x / len,
                        },
                        from_best_s: best.map_or(0.0, |m| t.seconds_since(&m).abs()),
                    });
                    x += step_s;
                }
            }
            out
        })
        .collect();
    per.into_iter().flatten().collect()
}

/// Rank of each candidate for ties: 0 for the one nearest its night's
/// highest altitude, 1 for the others (so equal gains go to the best time of
/// the earliest night).
fn tie_ranks(cands: &[Candidate]) -> Vec<f64> {
    let mut rank = vec![1.0; cands.len()];
    let mut i = 0;
    while i < cands.len() {
        // Candidates of one night are consecutive and less than a day apart.
        let mut j = i;
        let mut best = i;
        while j < cands.len() && cands[j].t.seconds_since(&cands[i].t) < 0.75 * 86_400.0 {
            if cands[j].from_best_s < cands[best].from_best_s {
                best = j;
            }
            j += 1;
        }
        rank[best] = 0.0;
        i = j;
    }
    rank
}

/// A star as the visit chooser sees it: its ephemeris and the scatter of
/// its relation (what its weight in the field's mean can at best be).
#[derive(Debug, Clone, Copy)]
pub struct ChooserStar {
    /// Epoch of maximum, BJD_TDB (days).
    pub epoch_bjd: f64,
    /// Period, days.
    pub period_d: f64,
    /// The relation's scatter for one star, mag.
    pub scatter_mag: f64,
}

/// The field's information as the visit chooser counts it: for each
/// candidate and star, the row of the `harmonics`-term Fourier design matrix
/// at the star's phase (the mean last, so that its variance is 1/L_pp² of
/// the normal matrix's Cholesky factor L), and the star's phase bin.
struct Info<'a> {
    stars: &'a [ChooserStar],
    /// Terms of the series, 2K + 1.
    p: usize,
    /// Weight of one point, 1/σ², mag⁻².
    inv_var: f64,
    /// `rows[(c × stars + s) × p + j]`.
    rows: Vec<f64>,
    /// `cells[c × stars + s]`: the phase bin.
    cells: Vec<usize>,
}

impl<'a> Info<'a> {
    fn new(
        cands: &[(Instant, Bjd, f64, f64)],
        stars: &'a [ChooserStar],
        bins: usize,
        harmonics: usize,
        sigma_point_mag: f64,
    ) -> Self {
        let p = 2 * harmonics + 1;
        let mut rows = Vec::with_capacity(cands.len() * stars.len() * p);
        let mut cells = Vec::with_capacity(cands.len() * stars.len());
        for (_, b, _, _) in cands {
            for s in stars {
                let x = frac_phase(b.days_since(s.epoch_bjd) / s.period_d);
                for j in 1..=harmonics {
                    let a = 2.0 * std::f64::consts::PI * j as f64 * x;
                    rows.push(a.cos());
                    rows.push(a.sin());
                }
                rows.push(1.0);
                cells.push(((x * bins as f64) as usize).min(bins.max(1) - 1));
            }
        }
        Info {
            stars,
            p,
            inv_var: 1.0 / (sigma_point_mag * sigma_point_mag),
            rows,
            cells,
        }
    }

    fn row(&self, c: usize, s: usize) -> &[f64] {
        let i = (c * self.stars.len() + s) * self.p;
        &self.rows[i..i + self.p]
    }

    /// Add candidate `c`'s point of star `s` to the normal matrix `a` (its
    /// lower triangle, p × p row-major).
    fn add(&self, a: &mut [f64], c: usize, s: usize) {
        let r = self.row(c, s);
        let p = self.p;
        for i in 0..p {
            let ri = r[i] * self.inv_var;
            for j in 0..=i {
                a[i * p + j] += ri * r[j];
            }
        }
    }

    /// The normal matrices of every star over the visits `set` but its
    /// `skip`th, stars one after the other.
    fn normals(&self, set: &[usize], skip: Option<usize>) -> Vec<f64> {
        let pp = self.p * self.p;
        let mut a = vec![0.0; self.stars.len() * pp];
        for (k, c) in set.iter().enumerate() {
            if Some(k) == skip {
                continue;
            }
            for s in 0..self.stars.len() {
                self.add(&mut a[s * pp..(s + 1) * pp], *c, s);
            }
        }
        a
    }

    /// Star `s`'s weight in the field's mean, 1/(σ_PL² + σm̄²), for the
    /// normal matrix `a` of `count` points; 0 while they cannot fix the
    /// series (fewer than 2K + 1, or bunched: a Cholesky pivot at or below
    /// [`crate::linalg::PIVOT_REL_TOL`] of its diagonal, the test of the
    /// fit's own inverse). `l` is scratch of p × p.
    fn weight(&self, a: &[f64], count: usize, s: usize, l: &mut [f64]) -> f64 {
        let p = self.p;
        if count < p {
            return 0.0;
        }
        for j in 0..p {
            let mut d = a[j * p + j];
            for k in 0..j {
                d -= l[j * p + k] * l[j * p + k];
            }
            if d.is_nan() || d <= crate::linalg::PIVOT_REL_TOL * a[j * p + j].abs() || d <= 0.0 {
                return 0.0;
            }
            let ljj = d.sqrt();
            l[j * p + j] = ljj;
            for i in j + 1..p {
                let mut v = a[i * p + j];
                for k in 0..j {
                    v -= l[i * p + k] * l[j * p + k];
                }
                l[i * p + j] = v / ljj;
            }
        }
        let var_mean = 1.0 / (l[p * p - 1] * l[p * p - 1]);
        let sc = self.stars[s].scatter_mag;
        1.0 / (sc * sc + var_mean)
    }

    /// The field's information with candidate `c` added to the normal
    /// matrices `base` of `count` points: the sum of the stars' weights.
    fn with(&self, base: &[f64], count: usize, c: usize, work: &mut [f64]) -> f64 {
        let pp = self.p * self.p;
        let (a, l) = work.split_at_mut(pp);
        let mut total = 0.0;
        for s in 0..self.stars.len() {
            a.copy_from_slice(&base[s * pp..(s + 1) * pp]);
            self.add(a, c, s);
            total += self.weight(a, count + 1, s, l);
        }
        total
    }

    /// The field's information at the visits `set`.
    fn total(&self, set: &[usize]) -> f64 {
        let pp = self.p * self.p;
        let a = self.normals(set, None);
        let mut l = vec![0.0; pp];
        (0..self.stars.len())
            .map(|s| self.weight(&a[s * pp..(s + 1) * pp], set.len(), s, &mut l))
            .sum()
    }

    /// The most information the field can have: every star's mean magnitude
    /// exact, Σ 1/σ_PL².
    fn ceiling(&self) -> f64 {
        self.stars
            .iter()
            .map(|s| 1.0 / (s.scatter_mag * s.scatter_mag))
            .sum()
    }
}

/// Whether candidate `a` goes before `b` at an equal score: the cheaper,
/// then the lower tie rank, then the earlier.
fn goes_before(cands: &[(Instant, Bjd, f64, f64)], a: usize, b: usize) -> bool {
    let (ca, cb) = (&cands[a], &cands[b]);
    if ca.3 != cb.3 {
        return ca.3 < cb.3;
    }
    if ca.2 != cb.2 {
        return ca.2 < cb.2;
    }
    ca.0 < cb.0
}

/// Whether candidate `c` may join the visits `set` (leaving out its
/// `skip`th): a usable cost, not one of them, none closer than `dwell_s`.
fn fits_with(
    cands: &[(Instant, Bjd, f64, f64)],
    set: &[usize],
    skip: Option<usize>,
    c: usize,
    dwell_s: f64,
) -> bool {
    cands[c].3.is_finite()
        && set.iter().enumerate().all(|(k, o)| {
            Some(k) == skip || (*o != c && cands[*o].0.seconds_since(&cands[c].0).abs() >= dwell_s)
        })
}

/// Grow `set` to `n` visits one at a time: the candidate that adds the most
/// information per second, the most (star, bin) cells still empty per
/// second until a visit can add information (fewer than 2K + 1 points).
fn grow(
    info: &Info,
    cands: &[(Instant, Bjd, f64, f64)],
    set: &mut Vec<usize>,
    n: usize,
    bins: usize,
    dwell_s: f64,
) {
    use rayon::prelude::*;
    let ns = info.stars.len();
    let pp = info.p * info.p;
    let mut covered = vec![false; ns * bins.max(1)];
    for c in set.iter() {
        for s in 0..ns {
            covered[s * bins.max(1) + info.cells[c * ns + s]] = true;
        }
    }
    while set.len() < n {
        let base = info.normals(set, None);
        let mut l = vec![0.0; pp];
        let weights: Vec<f64> = (0..ns)
            .map(|s| info.weight(&base[s * pp..(s + 1) * pp], set.len(), s, &mut l))
            .collect();
        let now: f64 = weights.iter().sum();
        // Per candidate: (information added, cells filled); None when it
        // cannot join.
        let gains: Vec<Option<(f64, usize)>> = (0..cands.len())
            .into_par_iter()
            .map_init(
                || vec![0.0; 2 * pp],
                |work, c| {
                    if !fits_with(cands, set, None, c, dwell_s) {
                        return None;
                    }
                    let cells = (0..ns)
                        .filter(|s| !covered[s * bins.max(1) + info.cells[c * ns + s]])
                        .count();
                    let (a, l) = work.split_at_mut(pp);
                    let mut add = 0.0;
                    for (s, w0) in weights.iter().enumerate() {
                        a.copy_from_slice(&base[s * pp..(s + 1) * pp]);
                        info.add(a, c, s);
                        add += (info.weight(a, set.len() + 1, s, l) - w0).max(0.0);
                    }
                    Some((add, cells))
                },
            )
            .collect();
        let by_info = gains
            .iter()
            .flatten()
            .any(|(g, _)| *g > 1e-9 * now.max(f64::MIN_POSITIVE));
        let mut best: Option<(usize, f64)> = None;
        for (c, g) in gains.iter().enumerate() {
            let Some((add, cells)) = g else { continue };
            let gain = if by_info { *add } else { *cells as f64 };
            if gain <= 0.0 {
                continue;
            }
            let score = gain / cands[c].3.max(1.0);
            let better = match best {
                None => true,
                Some((bc, bs)) => {
                    score > bs * (1.0 + 1e-12)
                        || (score >= bs * (1.0 - 1e-12) && goes_before(cands, c, bc))
                }
            };
            if better {
                best = Some((c, score));
            }
        }
        let Some((c, _)) = best else { break };
        for s in 0..ns {
            covered[s * bins.max(1) + info.cells[c * ns + s]] = true;
        }
        set.push(c);
    }
}

/// Exchange steps on `set`: replace one visit by another candidate while
/// that raises the field's information per second of the visits together
/// (Σ weights / Σ seconds), each step the best replacement of one visit
/// (visits taken in turn), until no replacement of any raises it or 20 n +
/// 50 visits have been looked at (a bound on the work for plans of many
/// points). Returns the set's information per second.
fn exchange(
    info: &Info,
    cands: &[(Instant, Bjd, f64, f64)],
    set: &mut [usize],
    dwell_s: f64,
) -> f64 {
    use rayon::prelude::*;
    let pp = info.p * info.p;
    let cost = |c: usize| cands[c].3.max(1.0);
    let seconds = |set: &[usize]| set.iter().map(|c| cost(*c)).sum::<f64>();
    let mut rate = info.total(set) / seconds(set);
    if set.is_empty() || rate <= 0.0 {
        return rate;
    }
    let ceiling = info.ceiling();
    // A bound on the work: visits looked at for a replacement, improving or
    // not (the demo's fields need at most 16 improving steps of 10 visits,
    // some 170 looks; the bound keeps a plan of many points from running on).
    let mut steps_left = 20 * set.len() + 50;
    let mut since = 0;
    let mut k = 0;
    while since < set.len() && steps_left > 0 {
        let base = info.normals(set, Some(k));
        let rest = seconds(set) - cost(set[k]);
        let snapshot: &[usize] = set;
        let best = (0..cands.len())
            .into_par_iter()
            .map_init(
                || vec![0.0; 2 * pp],
                |work, c| {
                    // Even exact mean magnitudes for every star would not
                    // raise the rate at this cost.
                    if ceiling / (rest + cost(c)) <= rate * (1.0 + 1e-9)
                        || !fits_with(cands, snapshot, Some(k), c, dwell_s)
                    {
                        return None;
                    }
                    let r = info.with(&base, snapshot.len() - 1, c, work) / (rest + cost(c));
                    (r > rate * (1.0 + 1e-9)).then_some((c, r))
                },
            )
            .collect::<Vec<_>>()
            .into_iter()
            .flatten()
            .fold(None, |acc: Option<(usize, f64)>, (c, r)| match acc {
                Some((bc, br))
                    if br > r * (1.0 + 1e-12)
                        || (br >= r * (1.0 - 1e-12) && !goes_before(cands, c, bc)) =>
                {
                    Some((bc, br))
                }
                _ => Some((c, r)),
            });
        match best {
            Some((c, r)) => {
                set[k] = c;
                rate = r;
                since = 0;
            }
            None => since += 1,
        }
        steps_left -= 1;
        k = (k + 1) % set.len();
    }
    rate
}

/// Choose up to `n` visits among `cands` (instant, BJD_TDB, tie rank, cost
/// in seconds: the visit's own length at that instant, so a low or moonlit
/// instant costs what its exposure does) for the stars of one pointing, all
/// of them together, for the most field information per second of
/// telescope time. The field's information is the sum over its stars of
/// their weights 1/(σ_PL² + σm̄²) (σm̄ from the Fourier fit of `harmonics`
/// terms to their phases, each point of error `sigma_point_mag`): a star
/// whose phases cover only part of its cycle has a large σm̄ and a weight
/// near 0, so the long-period stars pull the visits apart in time, and the
/// seconds in the denominator keep them off costly instants where cheaper
/// ones reach the same phases.
///
/// The visits are chosen together, not one at a time, by exchange steps as
/// in the exchange algorithms of optimal experimental design (Fedorov 1972,
/// Theory of Optimal Experiments; quoted from memory): two starting sets,
/// (1) grown one visit at a time (the candidate adding the most information
/// per second; until the phases can fix a series, fewer than 2K + 1 points,
/// the most (star, bin) cells still empty, `bins` bins per star, per
/// second) and (2) the cheapest candidate in each of `n` equal parts of the
/// candidates' time span (then grown to `n` if some parts have none), are
/// each improved by exchange steps (one visit replaced by another candidate
/// while that raises Σ weights / Σ seconds), and the better is kept (ties:
/// the first). Candidates with a cost that is not finite cannot be chosen.
/// Ties go to the cheaper candidate, then the lower rank, then the earlier;
/// no two visits are closer than `dwell_s`. The result is in time order.
#[allow(clippy::too_many_arguments)]
pub fn choose_visits(
    cands: &[(Instant, Bjd, f64, f64)],
    stars: &[ChooserStar],
    bins: usize,
    harmonics: usize,
    sigma_point_mag: f64,
    n: usize,
    dwell_s: f64,
) -> Vec<usize> {
    if cands.is_empty() || stars.is_empty() || n == 0 {
        return Vec::new();
    }
    let info = Info::new(cands, stars, bins, harmonics, sigma_point_mag);
    // (1) Grown one at a time.
    let mut grown = Vec::new();
    grow(&info, cands, &mut grown, n, bins, dwell_s);
    let rate_grown = exchange(&info, cands, &mut grown, dwell_s);
    // (2) Spread: the cheapest of each part of the span.
    let usable: Vec<usize> = (0..cands.len())
        .filter(|c| cands[*c].3.is_finite())
        .collect();
    let mut spread: Vec<usize> = Vec::new();
    if let (Some(first), Some(last)) = (
        usable.iter().min_by(|a, b| {
            cands[**a]
                .0
                .partial_cmp(&cands[**b].0)
                .unwrap_or(std::cmp::Ordering::Equal)
        }),
        usable.iter().max_by(|a, b| {
            cands[**a]
                .0
                .partial_cmp(&cands[**b].0)
                .unwrap_or(std::cmp::Ordering::Equal)
        }),
    ) {
        let t0 = cands[*first].0;
        let span_s = cands[*last].0.seconds_since(&t0);
        for part in 0..n {
            let lo = span_s * part as f64 / n as f64;
            let hi = span_s * (part + 1) as f64 / n as f64;
            let pick = usable
                .iter()
                .copied()
                .filter(|c| {
                    let x = cands[*c].0.seconds_since(&t0);
                    x >= lo && (x < hi || (part + 1 == n && x <= hi))
                })
                .filter(|c| fits_with(cands, &spread, None, *c, dwell_s))
                .fold(None, |acc: Option<usize>, c| match acc {
                    Some(b) if !goes_before(cands, c, b) => Some(b),
                    _ => Some(c),
                });
            if let Some(c) = pick {
                spread.push(c);
            }
        }
    }
    grow(&info, cands, &mut spread, n, bins, dwell_s);
    let rate_spread = exchange(&info, cands, &mut spread, dwell_s);
    let mut chosen = if spread.len() > grown.len()
        || (spread.len() == grown.len() && rate_spread > rate_grown * (1.0 + 1e-12))
    {
        spread
    } else {
        grown
    };
    chosen.sort_by(|a, b| {
        cands[*a]
            .0
            .partial_cmp(&cands[*b].0)
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    chosen
}

impl<'a> FieldPlanner<'a> {
    fn prepare(&self, fs: &FieldSetting, em: &dyn ExposureModel) -> Result<Prepared> {
        let fov = em.fov_arcmin().ok_or_else(|| {
            RungError::invalid(
                format!("field '{}'", fs.field.name),
                "the instrument gives no field of view (fov_arcmin in instruments.toml), so rung cannot tell which stars one pointing serves",
            )
        })?;
        let margin_arcsec = em.annulus_outer_arcsec();
        let mut notes = Vec::new();
        let d = &self.pulsator.config.defaults;
        // The field's metallicity is its stars' unless a star gives its own;
        // its error, when the field gives [Fe/H] without one, is assumed.
        let (_, feh_err_dex, feh_assumed) = field_metallicity(fs.field, self.config);
        if feh_assumed {
            notes.push(format!(
                "the field gives [Fe/H] without feh_err_dex: σ[Fe/H] = {} dex assumed (config/field.toml)",
                self.config.defaults.feh_err_dex
            ));
        }
        let mut members = Vec::with_capacity(fs.members.len());
        let mut excluded = Vec::with_capacity(fs.members.len());
        let (mut inferred, mut assumed): (Vec<&str>, Vec<&str>) = (Vec::new(), Vec::new());
        let mut assumed_note = None;
        for (idx, t) in fs.members.iter().enumerate() {
            let m = (|| -> std::result::Result<Member, String> {
                let mut star = Star::from_target(t).map_err(|e| e.to_string())?;
                take_field_metallicity(
                    &mut star.feh_dex,
                    &mut star.feh_err_dex,
                    fs.field,
                    self.config,
                );
                let mean = star.mean_mag.ok_or_else(|| {
                    "has no mean_mag: its exposure and distance need it".to_string()
                })?;
                let rel = star
                    .relation(&self.pulsator.config)
                    .map_err(|e| e.to_string())?;
                let half = star.amplitude_mag / 2.0;
                Ok(Member {
                    idx,
                    faint_mag: mean + half,
                    bright_mag: mean - half,
                    rel,
                    star,
                })
            })();
            match m {
                Ok(m) => {
                    if m.rel.class_from == ClassFrom::Inferred {
                        inferred.push(t.name.as_str());
                    }
                    if m.rel.feh_assumed && m.rel.relation.feh_coeff_mag_per_dex != 0.0 {
                        assumed.push(t.name.as_str());
                        if assumed_note.is_none() {
                            assumed_note =
                                m.rel.notes.iter().find(|n| n.contains("[Fe/H]")).cloned();
                        }
                    }
                    members.push(Some(m));
                    excluded.push(None);
                }
                Err(why) => {
                    notes.push(format!("{} is left out of the field: {why}", t.name));
                    members.push(None);
                    excluded.push(Some(why));
                }
            }
        }
        if !inferred.is_empty() {
            notes.push(format!(
                "class inferred from the period for {} star(s) ({}): only one class's relations cover their periods; give the class to be sure",
                inferred.len(),
                list_names(&inferred)
            ));
        }
        if let Some(n) = assumed_note {
            notes.push(format!(
                "{} star(s) ({}) and their field give no [Fe/H]: {n}",
                assumed.len(),
                list_names(&assumed)
            ));
        }
        let offsets: Vec<Option<[f64; 2]>> = fs
            .members
            .iter()
            .map(|t| standard_offset_arcmin(fs.field.ra_deg, fs.field.dec_deg, t.ra_deg, t.dec_deg))
            .collect();
        let usable: Vec<&Target> = members
            .iter()
            .flatten()
            .map(|m| fs.members[m.idx])
            .collect();
        let usable_idx: Vec<usize> = members.iter().flatten().map(|m| m.idx).collect();
        let pointings: Vec<PointingIdx> = pointings(fs.field, &usable, fov, margin_arcsec / 60.0)
            .into_iter()
            .map(|p| PointingIdx {
                centre: p.centre.map(|c| usable_idx[c]),
                stars: p.stars.iter().map(|s| usable_idx[*s]).collect(),
            })
            .collect();
        for p in pointings.iter().skip(1) {
            if let Some(c) = p.centre {
                let names: Vec<&str> = p
                    .stars
                    .iter()
                    .map(|s| fs.members[*s].name.as_str())
                    .collect();
                let off = offsets[c].map_or("more than 90°".to_string(), |o| {
                    format!("{:.1}′", (o[0] * o[0] + o[1] * o[1]).sqrt())
                });
                notes.push(format!(
                    "{} lie(s) outside the field's pointing ({:.1}′ × {:.1}′ less a {:.0}″ margin; {} is {off} from the centre): observed in a pointing of their own centred on {}",
                    names.join(", "),
                    fov[0],
                    fov[1],
                    margin_arcsec,
                    fs.members[c].name,
                    fs.members[c].name
                ));
            }
        }
        if usable_idx.is_empty() {
            notes.push(format!(
                "field '{}' has no star to plan: give its pulsators field = {}",
                fs.field.name, fs.field.name
            ));
        }
        Ok(Prepared {
            members,
            excluded,
            offsets,
            pointings,
            fov,
            margin_arcsec,
            wide: FieldWide {
                extinction_sigma_frac: d.extinction_sigma_frac,
            },
            feh_err_dex,
            feh_assumed,
            notes,
        })
    }

    /// The relation's terms for one star with σ_m̄.
    fn star_terms(&self, m: &Member, sigma_mean_mag: f64) -> StarTerms {
        let r = &m.rel.relation;
        let p = m.star.ephemeris.period_d;
        StarTerms {
            mu_mag: distance_modulus(
                m.star.mean_mag.unwrap_or(f64::NAN),
                p,
                m.star.extinction_mag,
                &m.rel,
            ),
            scatter_mag: r.scatter_mag,
            sigma_mean_mag,
            relation: format!("{} {}", r.class.as_str(), r.band),
            zero_point_err_mag: r.zero_point_err_mag,
            slope_err_mag_per_dex: r.slope_err,
            log_p_lever: p.log10() - r.pivot_log_p,
            gamma_mag_per_dex: r.feh_coeff_mag_per_dex,
            gamma_err_mag_per_dex: r.feh_coeff_err_mag_per_dex,
            feh_lever_dex: m.rel.feh_dex - r.feh_ref_dex,
            feh_err_dex: m.rel.feh_err_dex,
            extinction_mag: if r.reddening_free() {
                0.0
            } else {
                m.star.extinction_mag
            },
            calibration_band: r.band.clone(),
            calibration_floor_mag: self.pulsator.config.calibration_floor(r),
        }
    }

    /// The exposure of one visit of a pointing at `t`: per band, sized for
    /// the faintest star at its faint phase to reach `snr`, split for the
    /// brightest at its bright phase.
    #[allow(clippy::too_many_arguments)]
    fn visit_epoch(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        prep: &Prepared,
        p: &PointingIdx,
        centre: &CatalogPlace,
        t: Instant,
        snr: f64,
    ) -> Result<Epoch> {
        let ctx = Context::exact(fs.site, t)?;
        let mut exposures: Vec<BandExposure> = Vec::new();
        let mut visit_s = em.visit_overhead_s();
        for band in bands_of(prep, p) {
            let stars: Vec<&Member> = p
                .stars
                .iter()
                .filter_map(|s| prep.members[*s].as_ref())
                .filter(|m| m.star.band == band)
                .collect();
            let faint = stars
                .iter()
                .max_by(|a, b| a.faint_mag.total_cmp(&b.faint_mag))
                .ok_or_else(|| RungError::invalid("field", "a band without stars"))?;
            let (mut exptime_s, n) =
                em.exptime(faint.faint_mag, &band, snr, &ctx, &faint.star.place)?;
            // Split for the brightest star; each frame adds read noise, so
            // the exposure grows until the faintest star still reaches `snr`.
            let mut frames = n;
            let mut got = f64::NAN;
            for _ in 0..8 {
                frames = n;
                for m in &stars {
                    frames = frames.max(em.frames_for(
                        m.bright_mag,
                        &band,
                        exptime_s,
                        &ctx,
                        &m.star.place,
                    )?);
                }
                got = em.snr_in_frames(
                    faint.faint_mag,
                    &band,
                    exptime_s,
                    frames,
                    &ctx,
                    &faint.star.place,
                )?;
                if got >= snr * (1.0 - 1e-6) {
                    break;
                }
                exptime_s *= (snr / got).powi(2) * 1.0001;
            }
            visit_s += exptime_s + frames as f64 * em.readout_s();
            exposures.push(BandExposure {
                band,
                exptime_s,
                n_exposures: frames,
                snr: got,
            });
        }
        let pt = pointing(fs.site, &ctx, centre);
        Ok(Epoch {
            time: t,
            exptime_s: exposures.iter().map(|e| e.exptime_s).sum(),
            n_exposures: exposures.iter().map(|e| e.n_exposures).sum(),
            snr: exposures.first().map_or(f64::NAN, |e| e.snr),
            airmass: pt.airmass.unwrap_or(f64::NAN),
            visit_s,
            exposures,
        })
    }

    /// The centre of a pointing.
    fn centre_of(&self, fs: &FieldSetting, p: &PointingIdx) -> (String, CatalogPlace, f64, f64) {
        let t = match p.centre {
            None => fs.field,
            Some(c) => fs.members[c],
        };
        (t.name.clone(), t.place(), t.ra_deg, t.dec_deg)
    }

    /// The range of nights planned (at most [`MAX_RANGE_NIGHTS`] from the first).
    fn nights(
        &self,
        fs: &FieldSetting,
        notes: &mut Vec<String>,
    ) -> Result<Vec<std::sync::Arc<Night>>> {
        let capped_to = fs.from + chrono::Duration::days(MAX_RANGE_NIGHTS - 1);
        let to = if fs.to > capped_to {
            notes.push(format!(
                "phase coverage planned over the first {MAX_RANGE_NIGHTS} nights of the range ({} to {capped_to})",
                fs.from
            ));
            capped_to
        } else {
            fs.to
        };
        if to < fs.from {
            return Err(RungError::invalid(
                "date range",
                format!("the last night {to} is before the first {}", fs.from),
            ));
        }
        Night::shared_range(fs.site, fs.from, to)
    }

    /// Each candidate's cost (s): the visit at that instant (its airmass,
    /// its Moon), sized for the pointing's faintest star at `snr` without the
    /// frames split for the brightest, with the overheads; not finite where
    /// it cannot be exposed (the chooser then passes it by). When no
    /// candidate can be exposed every one costs `dwell_s`, so that the
    /// visits are still placed and say why they cannot be exposed.
    #[allow(clippy::too_many_arguments)]
    fn candidate_costs(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        prep: &Prepared,
        p: &PointingIdx,
        cands: &[Candidate],
        snr: f64,
        dwell_s: f64,
    ) -> Vec<f64> {
        use rayon::prelude::*;
        let faint: Vec<(&str, f64, &CatalogPlace)> = bands_of(prep, p)
            .into_iter()
            .filter_map(|band| {
                let m = p
                    .stars
                    .iter()
                    .filter_map(|s| prep.members[*s].as_ref())
                    .filter(|m| m.star.band == band)
                    .max_by(|a, b| a.faint_mag.total_cmp(&b.faint_mag))?;
                Some((m.star.band.as_str(), m.faint_mag, &m.star.place))
            })
            .collect();
        let out: Vec<f64> = cands
            .par_iter()
            .map(|c| {
                Context::exact(fs.site, c.t)
                    .ok()
                    .and_then(|ctx| {
                        let mut s = em.visit_overhead_s();
                        for (band, mag, place) in &faint {
                            let (t, n) = em.exptime(*mag, band, snr, &ctx, place).ok()?;
                            s += t + n as f64 * em.readout_s();
                        }
                        Some(s)
                    })
                    .unwrap_or(f64::INFINITY)
            })
            .collect();
        if out.iter().any(|c| c.is_finite()) {
            out
        } else {
            vec![dwell_s; cands.len()]
        }
    }

    /// The visits of every pointing: `n` per pointing at per-point SNR `snr`
    /// for its faintest star, over `bins` bins.
    #[allow(clippy::too_many_arguments)]
    fn place_visits(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        prep: &Prepared,
        nights: &[std::sync::Arc<Night>],
        n: usize,
        bins: usize,
        snr: f64,
        notes: &mut Vec<String>,
    ) -> Result<BTreeMap<String, Vec<Epoch>>> {
        let mut out = BTreeMap::new();
        for p in &prep.pointings {
            let (name, centre, _, _) = self.centre_of(fs, p);
            if p.stars.is_empty() {
                out.insert(name, Vec::new());
                continue;
            }
            // The visit's length at the middle of the first window (else 10 minutes).
            let mut dwell_s = 600.0;
            if let Some(first) = nights
                .iter()
                .find_map(|nt| nt.windows(&centre, &fs.limits).main_window())
            {
                let mid = first.0.add_seconds(first.1.seconds_since(&first.0) / 2.0);
                if let Ok(e) = self.visit_epoch(fs, em, prep, p, &centre, mid, snr) {
                    dwell_s = e.visit_s;
                }
            }
            let step = self.config.defaults.candidate_step_s.max(dwell_s);
            let ephs: Vec<ChooserStar> = p
                .stars
                .iter()
                .filter_map(|s| prep.members[*s].as_ref())
                .map(|m| ChooserStar {
                    epoch_bjd: m.star.ephemeris.epoch_max_bjd,
                    period_d: m.star.ephemeris.period_d,
                    scatter_mag: m.rel.relation.scatter_mag,
                })
                .collect();
            // Each point at the error the plan asks of the faintest star.
            let sigma_point_mag = MAG_PER_INV_SNR / snr;
            let harmonics = self.pulsator.harmonics;
            // A campaign: the visits are sought in the first
            // `campaign_nights` of the range, a span twice as long when they
            // do not fit, up to the whole range.
            let mut span = self.config.defaults.campaign_nights.min(nights.len());
            let (cands, chosen) = loop {
                let cands =
                    candidates(fs.site, &centre, &nights[..span], &fs.limits, dwell_s, step);
                let ranks = tie_ranks(&cands);
                // A visit's cost at each candidate: the faintest star's
                // exposure there (its airmass and Moon), with the overheads.
                let costs = self.candidate_costs(fs, em, prep, p, &cands, snr, dwell_s);
                let flat: Vec<(Instant, Bjd, f64, f64)> = cands
                    .iter()
                    .zip(&ranks)
                    .zip(&costs)
                    .map(|((c, r), k)| (c.t, c.bjd, *r, *k))
                    .collect();
                let chosen =
                    choose_visits(&flat, &ephs, bins, harmonics, sigma_point_mag, n, dwell_s);
                if chosen.len() >= n || span >= nights.len() {
                    break (cands, chosen);
                }
                span = (2 * span).min(nights.len());
            };
            if chosen.len() < n {
                notes.push(format!(
                    "pointing {name}: {} of the {n} visits asked fit in the range's windows",
                    chosen.len()
                ));
            }
            let mut epochs = Vec::with_capacity(chosen.len());
            // Visits that cannot be exposed, said once per pointing.
            let mut failed: Vec<(Instant, String)> = Vec::new();
            for c in chosen {
                match self.visit_epoch(fs, em, prep, p, &centre, cands[c].t, snr) {
                    Ok(e) => epochs.push(e),
                    Err(e) => failed.push((cands[c].t, e.to_string())),
                }
            }
            if let Some((t, e)) = failed.first() {
                notes.push(format!(
                    "pointing {name}: {} of its visits could not be exposed (the first at {}: {e})",
                    failed.len(),
                    t.iso()
                ));
            }
            out.insert(name, epochs);
        }
        Ok(out)
    }

    /// The field's report for given visits of its pointings (by the name of
    /// the target each pointing is centred on): each star's phases and
    /// signal-to-noise at the visits of its pointing (the CCD equation with the
    /// visit's exposure and split in its band), its mean-magnitude error from
    /// the Fourier fit's covariance, and the field's distance.
    pub fn predict(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        visits: &BTreeMap<String, Vec<Epoch>>,
    ) -> Result<FieldReport> {
        let prep = self.prepare(fs, em)?;
        let mut notes = prep.notes.clone();
        let bins = self.pulsator.bins;
        self.report(fs, em, &prep, visits, bins, f64::NAN, &mut notes)
    }

    #[allow(clippy::too_many_arguments)]
    fn report(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        prep: &Prepared,
        visits: &BTreeMap<String, Vec<Epoch>>,
        bins: usize,
        snr_asked: f64,
        notes: &mut Vec<String>,
    ) -> Result<FieldReport> {
        let k = self.pulsator.harmonics;
        let stale_at = self.pulsator.config.defaults.stale_phase;
        // The largest phase uncertainty of a star past `stale_at`, cycles.
        let mut stale_max: f64 = 0.0;
        let mut stars: Vec<FieldStar> = fs
            .members
            .iter()
            .enumerate()
            .map(|(i, t)| FieldStar {
                name: t.name.clone(),
                pointing: None,
                offset_arcmin: prep.offsets[i],
                period_d: t.period_d.unwrap_or(f64::NAN),
                band: t.band.clone(),
                mean_mag: t.mean_mag,
                amplitude_mag: t.amplitude_mag.unwrap_or(0.0),
                points: 0,
                bins_covered: 0,
                snr_lowest: None,
                sigma_mean_mag: None,
                distance_modulus_mag: None,
                weight: 0.0,
                excluded: prep.excluded[i].clone(),
            })
            .collect();
        let mut plans = Vec::new();
        let mut cautions = Vec::new();
        let mut terms: Vec<(usize, StarTerms)> = Vec::new();
        for (pi, p) in prep.pointings.iter().enumerate() {
            let (name, centre, ra, dec) = self.centre_of(fs, p);
            let epochs = visits.get(&name).cloned().unwrap_or_default();
            // Per star: phases and per-point errors.
            let mut pts: Vec<(Vec<f64>, Vec<f64>)> = vec![(Vec::new(), Vec::new()); p.stars.len()];
            for ep in &epochs {
                let ctx = Context::exact(fs.site, ep.time)?;
                if let Some(c) = sun_caution(fs.site, &pointing(fs.site, &ctx, &centre)) {
                    cautions.push(format!("{name} {}: {c}", ep.time.iso()));
                }
                for (j, s) in p.stars.iter().enumerate() {
                    let Some(m) = prep.members[*s].as_ref() else {
                        continue;
                    };
                    let Some(be) = ep.exposures.iter().find(|b| b.band == m.star.band) else {
                        continue;
                    };
                    let snr = match em.snr_in_frames(
                        m.faint_mag,
                        &be.band,
                        be.exptime_s,
                        be.n_exposures,
                        &ctx,
                        &m.star.place,
                    ) {
                        Ok(x) if x.is_finite() && x > 0.0 => x,
                        _ => continue,
                    };
                    let b = bjd_tdb_ctx(fs.site, &ctx, &m.star.place);
                    pts[j].0.push(m.star.ephemeris.phase(&b));
                    pts[j].1.push(MAG_PER_INV_SNR / snr);
                }
            }
            for (j, s) in p.stars.iter().enumerate() {
                let Some(m) = prep.members[*s].as_ref() else {
                    continue;
                };
                let st = &mut stars[*s];
                st.pointing = Some(pi);
                let (ph, sg) = &pts[j];
                st.points = ph.len();
                let mut seen = vec![false; bins];
                for x in ph {
                    seen[((x * bins as f64) as usize).min(bins - 1)] = true;
                }
                st.bins_covered = seen.iter().filter(|b| **b).count();
                st.snr_lowest = sg
                    .iter()
                    .map(|s| MAG_PER_INV_SNR / s)
                    .min_by(|a, b| a.total_cmp(b));
                if let Some(last) = epochs.last() {
                    let ctx = Context::exact(fs.site, last.time)?;
                    let b = bjd_tdb_ctx(fs.site, &ctx, &m.star.place);
                    let sig = m.star.ephemeris.phase_sigma(&b);
                    if sig > stale_at {
                        stale_max = stale_max.max(sig);
                        notes.push(format!(
                            "STALE EPHEMERIS: {} reaches a phase uncertainty of {sig:.3} cycles by its last visit, past {stale_at}; re-derive its period",
                            st.name
                        ));
                    }
                }
                match mean_mag_sigma(ph, sg, k) {
                    Ok(sm) => {
                        let tm = self.star_terms(m, sm);
                        st.sigma_mean_mag = Some(sm);
                        st.distance_modulus_mag = Some(tm.mu_mag);
                        terms.push((*s, tm));
                    }
                    Err(e) => {
                        let why = if ph.is_empty() {
                            "no visit measures it".to_string()
                        } else {
                            e.to_string()
                        };
                        st.excluded = Some(why);
                    }
                }
            }
            let members: Vec<&Member> = p
                .stars
                .iter()
                .filter_map(|s| prep.members[*s].as_ref())
                .collect();
            let faint = members
                .iter()
                .max_by(|a, b| a.faint_mag.total_cmp(&b.faint_mag));
            let bright = members
                .iter()
                .min_by(|a, b| a.bright_mag.total_cmp(&b.bright_mag));
            plans.push(PointingPlan {
                target: name,
                ra_deg: ra,
                dec_deg: dec,
                stars: p
                    .stars
                    .iter()
                    .map(|s| fs.members[*s].name.clone())
                    .collect(),
                faintest: faint.map(|m| fs.members[m.idx].name.clone()),
                faintest_mag: faint.map(|m| m.faint_mag),
                brightest: bright.map(|m| fs.members[m.idx].name.clone()),
                brightest_mag: bright.map(|m| m.bright_mag),
                hours: epochs.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0,
                epochs,
            });
        }
        let only: Vec<StarTerms> = terms.iter().map(|(_, t)| t.clone()).collect();
        let distance = combine(&only, &prep.wide);
        if let Some(d) = &distance {
            for ((s, _), w) in terms.iter().zip(&d.weights) {
                stars[*s].weight = *w;
            }
        }
        // Stars whose period outlasts their pointing's visits: their phases
        // are only partly covered, their mean magnitudes poorly fixed and
        // their weight small. Said, so that a weight near 0 is not a mystery.
        for (k, p) in plans.iter().enumerate() {
            let (Some(first), Some(last)) = (p.epochs.first(), p.epochs.last()) else {
                continue;
            };
            let span_d = last.time.seconds_since(&first.time) / 86_400.0;
            // Those that lose more than half the weight the best star has.
            let wtop = stars.iter().map(|x| x.weight).fold(0.0f64, f64::max);
            let long: Vec<&FieldStar> = stars
                .iter()
                .filter(|x| {
                    x.pointing == Some(k)
                        && x.excluded.is_none()
                        && x.period_d > span_d
                        && x.bins_covered < bins
                        && x.weight < 0.5 * wtop
                })
                .collect();
            if long.is_empty() {
                continue;
            }
            let (pmin, pmax) = long.iter().fold((f64::INFINITY, 0.0f64), |(a, b), x| {
                (a.min(x.period_d), b.max(x.period_d))
            });
            let (bmin, bmax) = long.iter().fold((usize::MAX, 0), |(a, b), x| {
                (a.min(x.bins_covered), b.max(x.bins_covered))
            });
            let smax = long
                .iter()
                .filter_map(|x| x.sigma_mean_mag)
                .fold(0.0f64, f64::max);
            let wmax = long.iter().map(|x| x.weight).fold(0.0f64, f64::max);
            let names: Vec<&str> = long.iter().map(|x| x.name.as_str()).collect();
            notes.push(format!(
                "pointing {}: {} star(s) with periods ({:.1}–{:.1} d) longer than its visits' span ({:.1} d) cover only {}–{} of {} phase bins, so their mean magnitudes are poorly fixed (σm̄ up to {:.2} mag) and they carry little weight (at most {:.3}, the best star {:.3}): {}; visits spread over {:.0} nights or more would count them",
                p.target,
                long.len(),
                pmin,
                pmax,
                span_d,
                bmin,
                bmax,
                bins,
                smax,
                wmax,
                wtop,
                names.join(", "),
                pmax.ceil()
            ));
        }
        for (i, st) in stars.iter().enumerate() {
            if let Some(why) = &st.excluded
                && prep.excluded[i].is_none()
            {
                notes.push(format!(
                    "{} does not count in the field's distance: {why}",
                    st.name
                ));
            }
        }
        let mut all: Vec<Epoch> = plans
            .iter()
            .flat_map(|p| p.epochs.iter().cloned())
            .collect();
        all.sort_by(|a, b| {
            a.time
                .partial_cmp(&b.time)
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        let hours = all.iter().map(|e| e.visit_s).sum::<f64>() / 3600.0;
        let pct = distance
            .as_ref()
            .map_or(f64::INFINITY, |d| d.distance_precision_pct);
        let floor = distance.as_ref().map_or(f64::NAN, |d| d.floor_pct);
        let verdict = match fs.goal_pct {
            _ if all.is_empty() => Verdict::NotObservable {
                when: Some(format!(
                    "no visit between {} and {} under these limits",
                    fs.from, fs.to
                )),
            },
            _ if !pct.is_finite() => Verdict::NeedsMoreSeasons { seasons: None },
            Some(g) if pct <= g => Verdict::Reachable,
            Some(g) if floor >= g => Verdict::LimitedByFloor { floor_pct: floor },
            Some(_) => Verdict::NeedsMoreSeasons { seasons: None },
            None => Verdict::Reachable,
        };
        // A star whose phases its ephemeris cannot predict: the field's
        // precision assumed them (the stars' notes say which).
        let verdict = if verdict == Verdict::Reachable && stale_max > 0.0 {
            Verdict::StaleEphemeris {
                phase_sigma: stale_max,
            }
        } else {
            verdict
        };
        let points = plans.iter().map(|p| p.epochs.len()).max().unwrap_or(0);
        Ok(FieldReport {
            field: fs.field.name.clone(),
            ra_deg: fs.field.ra_deg,
            dec_deg: fs.field.dec_deg,
            fov_arcmin: prep.fov,
            margin_arcsec: prep.margin_arcsec,
            feh_dex: fs.field.feh_dex,
            feh_err_dex: prep.feh_err_dex,
            feh_err_assumed: prep.feh_assumed,
            goal_pct: fs.goal_pct,
            points_per_star: points,
            bins,
            snr_faintest: snr_asked,
            prediction: Prediction {
                kind: Kind::Field,
                epochs: all,
                distance_precision_pct: pct,
                hours_needed: hours,
                verdict,
                notes: notes.clone(),
                error_terms: distance
                    .as_ref()
                    .map(|d| d.error_terms.clone())
                    .unwrap_or_default(),
            },
            pointings: plans,
            stars,
            distance,
            cautions,
            notes: notes.clone(),
            anchored: None,
            anchored_why: None,
        })
    }

    /// The field's σ_μ (mag) expected from `n` well-spread points per star at
    /// per-point SNR `snr` for each pointing's faintest star, with every
    /// exposure taken at a reference instant of the pointing (the middle of
    /// its first window): σ_m̄,i = 1.0857/(SNR_i √n) (the fit covariance for
    /// points spread evenly in phase). Infinite when an exposure fails.
    fn model_sigma(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        prep: &Prepared,
        refs: &[Option<Instant>],
        n: usize,
        snr: f64,
    ) -> f64 {
        let mut terms = Vec::new();
        for (p, t) in prep.pointings.iter().zip(refs) {
            let Some(t) = t else { continue };
            let (_, centre, _, _) = self.centre_of(fs, p);
            let Ok(ep) = self.visit_epoch(fs, em, prep, p, &centre, *t, snr) else {
                return f64::INFINITY;
            };
            let Ok(ctx) = Context::exact(fs.site, *t) else {
                return f64::INFINITY;
            };
            for s in &p.stars {
                let Some(m) = prep.members[*s].as_ref() else {
                    continue;
                };
                let Some(be) = ep.exposures.iter().find(|b| b.band == m.star.band) else {
                    continue;
                };
                let Ok(x) = em.snr_in_frames(
                    m.faint_mag,
                    &be.band,
                    be.exptime_s,
                    be.n_exposures,
                    &ctx,
                    &m.star.place,
                ) else {
                    return f64::INFINITY;
                };
                terms.push(self.star_terms(m, MAG_PER_INV_SNR / (x * (n as f64).sqrt())));
            }
        }
        combine(&terms, &prep.wide).map_or(f64::INFINITY, |d| d.sigma_mu_mag)
    }

    /// The highest per-point SNR in [lo, hi] a visit at each pointing's
    /// reference instant can give its faintest star (bisection on whether the
    /// exposure fits one visit); `lo` when even that does not fit (the visits
    /// then say why).
    fn feasible_snr(
        &self,
        fs: &FieldSetting,
        em: &dyn ExposureModel,
        prep: &Prepared,
        refs: &[Option<Instant>],
        lo: f64,
        hi: f64,
    ) -> f64 {
        let fits = |snr: f64| {
            prep.pointings.iter().zip(refs).all(|(p, t)| {
                let Some(t) = t else { return true };
                let (_, centre, _, _) = self.centre_of(fs, p);
                self.visit_epoch(fs, em, prep, p, &centre, *t, snr).is_ok()
            })
        };
        if fits(hi) {
            return hi;
        }
        if !fits(lo) {
            return lo;
        }
        let (mut a, mut b) = (lo.ln(), hi.ln());
        for _ in 0..16 {
            let mid = 0.5 * (a + b);
            if fits(mid.exp()) {
                a = mid;
            } else {
                b = mid;
            }
        }
        a.exp()
    }

    /// The field's plan: with a goal, the fewest points per star and the
    /// lowest per-point SNR for the faintest star that reach it (or the floor
    /// when no number of points can); without, the pulsating-star method's
    /// proposal (its bins and per-point SNR).
    ///
    /// Rule: the floor is the field's σ with perfect mean magnitudes; a goal
    /// at or below it is out of reach (the plan is then the proposal). Else
    /// n starts at max(bins, 2K + 1) points and, for each n, the smallest
    /// per-point SNR in [snr_min, snr_max] whose expected σ reaches the goal
    /// is found by bisection; when snr_max is not enough n grows by half. The
    /// visits are then chosen ([`choose_visits`]) and the prediction from
    /// their actual phases decides; the SNR is raised (then n) up to three
    /// times when uneven phases fall short.
    pub fn plan(&self, fs: &FieldSetting, em: &dyn ExposureModel) -> Result<FieldReport> {
        let prep = self.prepare(fs, em)?;
        let mut notes = prep.notes.clone();
        let nights = self.nights(fs, &mut notes)?;
        let d = &self.pulsator.config.defaults;
        let k = self.pulsator.harmonics;
        let n0 = self.pulsator.bins.max(2 * k + 1);
        let run = |n: usize, snr: f64, notes: &mut Vec<String>| -> Result<FieldReport> {
            let mut notes2 = notes.clone();
            let v = self.place_visits(fs, em, &prep, &nights, n, n, snr, &mut notes2)?;
            self.report(fs, em, &prep, &v, n, snr, &mut notes2)
        };
        let Some(goal) = fs.goal_pct else {
            return run(n0, self.pulsator.snr, &mut notes);
        };
        // The floor: perfect mean magnitudes.
        let perfect: Vec<StarTerms> = prep
            .members
            .iter()
            .flatten()
            .map(|m| self.star_terms(m, 0.0))
            .collect();
        let floor = combine(&perfect, &prep.wide).map_or(f64::NAN, |x| x.floor_pct);
        if perfect.is_empty() {
            return run(n0, self.pulsator.snr, &mut notes);
        }
        let out_of_reach = goal <= floor * (1.0 + 1e-9);
        let aim = if out_of_reach {
            let aim = floor * self.config.defaults.floor_margin;
            notes.push(format!(
                "goal {goal} % is out of reach for this field: the relation's scatter over its stars and the field-wide terms set a floor of {floor:.2} % whatever the points; planned for {aim:.2} % ({} × the floor)",
                self.config.defaults.floor_margin
            ));
            aim
        } else {
            goal
        };
        let s_goal = aim / 100.0 / DIST_FRAC_PER_MAG;
        let refs: Vec<Option<Instant>> = prep
            .pointings
            .iter()
            .map(|p| {
                let (_, centre, _, _) = self.centre_of(fs, p);
                nights.iter().find_map(|nt| {
                    nt.windows(&centre, &fs.limits)
                        .main_window()
                        .map(|w| w.0.add_seconds(w.1.seconds_since(&w.0) / 2.0))
                })
            })
            .collect();
        let max_n = self.config.defaults.max_points;
        // The highest per-point SNR one visit can reach for every pointing's
        // faintest star (at most snr_max): a faint field cannot be asked for
        // SNR 300, and asking for it must not leave the field without visits.
        let snr_top = self.feasible_snr(fs, em, &prep, &refs, d.snr_min, d.snr_max);
        let mut n = n0;
        let mut snr = snr_top;
        loop {
            if self.model_sigma(fs, em, &prep, &refs, n, snr_top) <= s_goal {
                let (mut lo, mut hi) = (d.snr_min.ln(), snr_top.ln());
                if self.model_sigma(fs, em, &prep, &refs, n, d.snr_min) <= s_goal {
                    hi = lo;
                }
                for _ in 0..20 {
                    let mid = 0.5 * (lo + hi);
                    if self.model_sigma(fs, em, &prep, &refs, n, mid.exp()) <= s_goal {
                        hi = mid;
                    } else {
                        lo = mid;
                    }
                }
                snr = hi.exp();
                break;
            }
            if n >= max_n {
                break;
            }
            n = (n + n / 2).min(max_n);
        }
        let mut r = run(n, snr, &mut notes)?;
        for _ in 0..3 {
            if r.prediction.distance_precision_pct <= aim || r.prediction.epochs.is_empty() {
                break;
            }
            if snr < snr_top * 0.999 {
                snr = (snr * 1.5).min(snr_top);
            } else if n < max_n {
                n = (n + n / 2).min(max_n);
            } else {
                break;
            }
            r = run(n, snr, &mut notes)?;
        }
        let text = format!(
            "{} {:.2} %: {n} points per star over {n} phase bins, each pointing's faintest star at SNR {snr:.0} per point (σ ≈ {:.4} mag)",
            if out_of_reach { "aim" } else { "goal" },
            aim,
            MAG_PER_INV_SNR / snr
        );
        r.notes.push(text.clone());
        r.prediction.notes.push(text);
        if out_of_reach && !r.prediction.epochs.is_empty() {
            r.prediction.verdict = Verdict::LimitedByFloor { floor_pct: floor };
        }
        Ok(r)
    }
}

/// Names for a note: all up to six, else the first five and a count.
fn list_names(names: &[&str]) -> String {
    if names.len() <= 6 {
        names.join(", ")
    } else {
        format!("{}, … and {} more", names[..5].join(", "), names.len() - 5)
    }
}

/// The bands of a pointing's stars, in the order they first appear.
fn bands_of(prep: &Prepared, p: &PointingIdx) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for s in &p.stars {
        if let Some(m) = prep.members[*s].as_ref()
            && !out.contains(&m.star.band)
        {
            out.push(m.star.band.clone());
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_config_parses() {
        let c = FieldConfig::builtin();
        assert_eq!(c.defaults.feh_err_dex, 0.2);
        let e = FieldConfig::merged("[defaults]\nfeh_err_dex = 3\n", Path::new("u.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("u.toml") && e.contains("feh_err_dex"), "{e}");
    }
}
