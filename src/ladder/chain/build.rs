//! The ladder of a programme: its targets and their links turned into the
//! observations of [`Chain`], each observation's σ from its method's plan
//! (the same plan every view and the budget show), and the steps an
//! observer could take next (docs/science.md, The ladder).
//!
//! Who is what:
//!
//! - a **pulsator with a parallax** (`parallax_mas` on a pulsator row) is an
//!   anchor: its parallax (as planned by the parallax method, or as given by
//!   `parallax_err_mas`) fixes its node's modulus, and its mean magnitude
//!   ties its relation's zero point to it;
//! - a **pulsator** without one is a host star: its node (its field, or the
//!   star standing alone) gets a distance through its relation;
//! - a **transient** with a `host` link (or a host distance given with
//!   `host_mu_mag` ± `host_mu_err_mag`) is a calibrator of its
//!   standardization's peak; one with a redshift and no host is in the
//!   Hubble flow;
//! - each relation used gets the priors of its published slope and
//!   metallicity term, and each node the prior of its metallicity.
//!
//! An observation's own error terms come from its method's prediction; the
//! terms the chain replaces are left out: every *shared* term (a
//! relation's or a standardization's zero point), a pulsator's metallicity
//! term (carried as its node's parameter, shared by the node's stars), a
//! calibrator's given host distance and peculiar velocity.

use super::model::{Chain, ChainError, MAG_PER_LN, Observation, Param, Rung, Term};
use super::next::{Change, Step};
use crate::error::{Location, Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::parallax::ParallaxMethod;
use crate::ladder::pulsator::{PulsatorMethod, Relation, Star};
use crate::ladder::transient::{StandardizedPeak, TransientMethod, ZeroPoint};
use crate::ladder::{ErrorTerm, Method, Prediction};
use crate::programme::Settings;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::path::Path;

/// What a target is on the ladder.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// A pulsator with a parallax.
    Anchor,
    /// A pulsator whose node takes its distance from its relation.
    HostStar,
    /// A supernova in a host with a distance.
    Calibrator,
    /// A supernova whose redshift gives its distance.
    HubbleFlow,
}

impl Role {
    /// The role in words.
    pub fn text(self) -> &'static str {
        match self {
            Role::Anchor => "anchor",
            Role::HostStar => "host star",
            Role::Calibrator => "calibrator",
            Role::HubbleFlow => "Hubble flow",
        }
    }
}

/// One target on the ladder.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Member {
    /// Target name.
    pub target: String,
    /// Its kind.
    pub kind: Kind,
    /// Its role.
    pub role: Role,
    /// The node it measures or sits in (its field, its host, itself).
    pub node: Option<String>,
    /// The relation (pulsators) or standardization (supernovae) it uses.
    pub relation: String,
    /// Its observations, as indices into the chain.
    pub observations: Vec<usize>,
    /// Telescope hours its plan takes (all its observations).
    pub hours: f64,
}

/// The ladder of a programme: the chain, who is on it and what was left out.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Ladder {
    /// The observations.
    pub chain: Chain,
    /// The targets on the ladder, in file order.
    pub members: Vec<Member>,
    /// Targets of the programme left off the ladder, with the reason.
    pub left_out: Vec<(String, String)>,
    /// Warnings for the observer (anchors whose parallax is too poor for a
    /// linear transform, plans that failed).
    pub notes: Vec<String>,
    /// What one more epoch, star, calibrator or anchor would do.
    pub steps: Vec<Step>,
    /// H0 of the distance scale the supernova values are written on, km/s/Mpc.
    pub h0_ref_km_s_mpc: f64,
    /// Each host node's planned distance (the moduli the calibrators' plans
    /// are made with; see [`host_distance`]).
    pub host_moduli: BTreeMap<String, HostModulus>,
    /// Each calibrator's given peak, standardized as its chase standardizes
    /// it (calibrators without a given peak take the planned value).
    pub peaks: BTreeMap<String, CalibratorPeak>,
    /// The Hubble-flow supernovae already observed, which measure the flow
    /// with their fitted peaks (the others take planned values on the
    /// `h0_ref_km_s_mpc` scale).
    pub flow_measured: Vec<String>,
}

/// A calibrator's given peak on the ladder.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CalibratorPeak {
    /// The peak standardized ([`TransientMethod::standardized_peak`]).
    pub peak: StandardizedPeak,
    /// Whether the supernova is already observed (its peak's error given):
    /// its M_B is measured; otherwise the given peak is a forecast.
    pub observed: bool,
}

/// A calibrator's M_B further than this from the zero point is named in the
/// notes, mag (the chase's own check of a given peak against its distance).
pub const MB_WARN_MAG: f64 = 1.0;

/// A host node's planned distance modulus, as the ladder plans its
/// calibrators with it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HostModulus {
    /// Distance modulus, mag.
    pub modulus_mag: f64,
    /// Its σ, mag.
    pub sigma_mag: f64,
    /// Where it comes from, in words.
    pub source: String,
}

/// Where a node's planned modulus comes from when the chain fixes it.
pub const SOURCE_CHAIN: &str = "the ladder: its stars' mean magnitudes (its field's plan) through the relation whose zero point the programme's anchors fix";
/// Where it comes from when no anchor fixes its relation's zero point.
pub const SOURCE_FIELD: &str = "its field's plan (rung phase --field) with the relation's published zero point: no anchor of the programme fixes it";

/// A calibrator's host and its planned distance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HostDistance {
    /// The host named on the supernova's row (`host`).
    pub host: String,
    /// The ladder's node it is (the field; a pulsator's field, or the pulsator).
    pub node: String,
    /// Distance modulus, mag.
    pub modulus_mag: f64,
    /// Its σ, mag.
    pub sigma_mag: f64,
    /// Where it comes from, in words.
    pub source: String,
    /// Whether it is the row's `host_mu_mag` ± `host_mu_err_mag` (an
    /// override of the host's planned distance).
    pub overridden: bool,
}

/// An error about the `host` field of `t`'s row, with the file and line.
fn host_error(file: Option<&Path>, t: &Target, msg: String) -> RungError {
    let line = file
        .and_then(|f| std::fs::read_to_string(f).ok().map(|x| (f, x)))
        .and_then(|(f, x)| crate::io::links::line_of(&x, f, &t.name));
    RungError::InFile {
        loc: Location {
            file: file.map(Path::to_path_buf),
            line,
            field: Some("host".into()),
        },
        msg,
    }
}

/// The planned distance of the host a transient's `host` column names: the
/// same moduli the ladder plans its calibrators with ([`build`]'s
/// `host_moduli`: the chain of the programme's pulsators and anchors, or,
/// where no anchor fixes the relation, the field's own plan as `rung phase
/// --field` gives it). The row's `host_mu_mag` ± `host_mu_err_mag`, when
/// given, override it (said in [`HostDistance::source`]). `None` without a
/// host link. A host that is not a target of the programme, is not a field
/// or pulsator, or has no distance is an error with the file, the row's
/// line and the field `host`.
pub fn host_distance(
    settings: &Settings,
    targets: &[Target],
    file: Option<&Path>,
    t: &Target,
) -> Result<Option<HostDistance>> {
    if t.host.is_empty() {
        return Ok(None);
    }
    let names: std::collections::HashSet<&str> = targets.iter().map(|x| x.name.as_str()).collect();
    if let Some((_, msg)) = crate::io::links::dangling(t, &names).into_iter().next() {
        return Err(host_error(file, t, msg));
    }
    let Some(h) = targets.iter().find(|x| x.name == t.host) else {
        return Err(host_error(
            file,
            t,
            format!("'{}' is not a target of the programme", t.host),
        ));
    };
    let node = match h.kind {
        Kind::Pulsator => node_of(h),
        Kind::Field => h.name.clone(),
        k => {
            return Err(host_error(
                file,
                t,
                format!(
                    "'{}' is a {} target: a host is a field of pulsators (or a pulsator standing for one)",
                    h.name,
                    k.as_str()
                ),
            ));
        }
    };
    if let (Some(mu), Some(err)) = (t.host_mu_mag, t.host_mu_err_mag) {
        return Ok(Some(HostDistance {
            host: t.host.clone(),
            node,
            modulus_mag: mu,
            sigma_mag: err,
            source: format!(
                "host_mu_mag ± host_mu_err_mag on the row of {}: an override of {}'s planned distance",
                t.name, t.host
            ),
            overridden: true,
        }));
    }
    // The ladder's first rungs (no supernova is planned for them).
    let below: Vec<Target> = targets
        .iter()
        .filter(|x| x.kind != Kind::Transient)
        .cloned()
        .collect();
    let l = build(settings, &below, file)?;
    match l.host_moduli.get(&node) {
        Some(m) => Ok(Some(HostDistance {
            host: t.host.clone(),
            node,
            modulus_mag: m.modulus_mag,
            sigma_mag: m.sigma_mag,
            source: m.source.clone(),
            overridden: false,
        })),
        None => {
            let mut why: Vec<String> = l
                .left_out
                .iter()
                .filter(|(n, _)| {
                    targets
                        .iter()
                        .any(|x| &x.name == n && x.kind == Kind::Pulsator && node_of(x) == node)
                })
                .take(2)
                .map(|(n, w)| format!("{n} left out: {w}"))
                .collect();
            if why.is_empty() {
                why.push(if h.kind == Kind::Field {
                    "no star of the field counts (give its pulsators the field column)".into()
                } else {
                    "no anchor fixes its relation's zero point and it is not in a field".into()
                });
            }
            Err(host_error(
                file,
                t,
                format!(
                    "'{}' has no distance: {} (or give host_mu_mag and host_mu_err_mag on the row)",
                    t.host,
                    why.join("; ")
                ),
            ))
        }
    }
}

/// A planned observation of one target: its prediction and what one more
/// visit would give.
struct Planned {
    prediction: Prediction,
    one_more: Option<Prediction>,
    /// Whether the goal was out of reach and the method's proposal is used.
    fallback: bool,
}

/// The method's plan of a target (the budget's and the views': goal mode
/// when it has a goal, else the proposal) and its one-more-visit step.
fn plan(settings: &Settings, m: &dyn Method, t: &Target) -> Result<Planned> {
    let goal = settings.goal_for(t);
    let t = crate::ladder::with_goal(t, goal);
    let s = settings.setting(&t);
    let em = &settings.photometer;
    let mut prediction = crate::programme::report(settings, &t)?
        .prediction()
        .ok_or_else(|| {
            RungError::invalid(format!("target '{}'", t.name), "its method gives no plan")
        })?;
    let mut fallback = false;
    if prediction.epochs.is_empty() || !prediction.distance_precision_pct.is_finite() {
        // The goal is out of reach in the range: what the method's own
        // proposal over the range buys still counts on the ladder.
        let e = m.propose(&s, em)?;
        if !e.is_empty() {
            prediction = m.predict(&s, em, &e)?;
            fallback = prediction.distance_precision_pct.is_finite();
        }
    }
    let one_more = if prediction.epochs.is_empty() {
        None
    } else {
        m.one_more(&s, em, &prediction)?
    };
    Ok(Planned {
        prediction,
        one_more,
        fallback,
    })
}

/// An observation's terms less those named (the chain replaces them).
type TermsOf = Box<dyn Fn(&[&str]) -> Vec<Term>>;

/// The node a pulsator belongs to: its field (the `field` column), else itself.
fn node_of(t: &Target) -> String {
    if t.field.is_empty() {
        t.name.clone()
    } else {
        t.field.clone()
    }
}

/// Where a pulsator's mean magnitude comes from.
enum Phot {
    /// Its own plan (a star standing alone).
    Own(Box<Planned>),
    /// Its field's plan (one pointing's visits serve all its stars): the
    /// star's mean-magnitude error and its share of the field's hours.
    Field {
        /// Error of its mean magnitude, mag.
        sigma_mean_mag: f64,
        /// The field's hours over its counted stars.
        hours: f64,
        /// Its field.
        field: String,
        /// The phase points the field's plan gives it.
        points: usize,
    },
}

/// A field star's mean-magnitude observation in the chain.
struct FieldObs {
    observation: usize,
    sigma_mean_mag: f64,
    points: usize,
    scatter_mag: f64,
    rung: Rung,
}

/// One more visit of a field: each of its pointings observed once more
/// (the hours of one of its planned visits each), so every star they
/// measure gets one more phase point. A star's mean-magnitude error from N
/// points of a Fourier fit goes as 1/√N (docs/science.md, Pulsating stars),
/// so it becomes σ √(N/(N+1)). `None` when the field has no planned visit.
fn field_visit_step(
    field: &str,
    fr: &crate::ladder::field::FieldReport,
    obs: &[FieldObs],
) -> Option<Step> {
    let hours: f64 = fr
        .pointings
        .iter()
        .filter(|p| !p.epochs.is_empty())
        .map(|p| p.hours / p.epochs.len() as f64)
        .sum();
    if hours.is_nan() || hours <= 0.0 || obs.is_empty() {
        return None;
    }
    let observations = obs
        .iter()
        .filter(|o| o.points > 0)
        .map(|o| {
            let n = o.points as f64;
            (
                o.observation,
                vec![
                    Term::new("relation scatter", o.scatter_mag),
                    Term::new("mean magnitude", o.sigma_mean_mag * (n / (n + 1.0)).sqrt()),
                ],
            )
        })
        .collect();
    Some(Step {
        label: format!("one more visit of field {field}"),
        rung: obs[0].rung,
        target: field.to_string(),
        hours,
        change: Change::SharperMany { observations },
    })
}

/// A relation's name on the ladder: its class and band ("cepheid V").
fn relation_name(r: &Relation) -> String {
    format!("{} {}", r.class.as_str(), r.band)
}

/// The error terms of a prediction the chain keeps for an observation: the
/// non-shared ones, less those named in `drop` (the chain carries them
/// otherwise).
fn own_terms(p: &Prediction, drop: &[&str]) -> Vec<Term> {
    p.error_terms
        .iter()
        .filter(|t: &&ErrorTerm| !t.shared && !drop.contains(&t.name.as_str()))
        .map(|t| Term::new(t.name.clone(), t.sigma_mag))
        .collect()
}

/// The pulsator method's name for the metallicity term |γ| σ[Fe/H]: shared
/// by the stars of one node (one metallicity), so the chain carries it as
/// the node's parameter.
const FEH_TERM: &str = "metallicity";

/// Fractional parallax error past which an anchor is noted: the linear
/// transform to a modulus starts to be biased (docs/science.md, The ladder;
/// 10 % is the common practice for the onset of the Lutz–Kelker bias).
pub const WARN_PARALLAX_FRAC: f64 = 0.10;

/// Fractional parallax error past which an anchor is left out of the fit
/// (common practice: parallax samples are cut at 10–20 %; rung takes 20 %).
pub const MAX_PARALLAX_FRAC: f64 = 0.20;

/// Names of transient terms the chain replaces.
const HOST_TERM: &str = "host distance";
const PEC_TERM: &str = "peculiar velocity";

fn link_error(file: Option<&Path>, e: RungError) -> RungError {
    match e {
        RungError::InFile { loc, msg } => RungError::InFile {
            loc: Location {
                file: loc.file.or_else(|| file.map(Path::to_path_buf)),
                ..loc
            },
            msg,
        },
        e => e,
    }
}

/// Build the ladder of `targets` with the programme's settings. `file`
/// names the targets file in link errors (with the line of the row, when
/// the file can be read). A link that names no target, or a target that
/// cannot be a host, is an error.
pub fn build(settings: &Settings, targets: &[Target], file: Option<&Path>) -> Result<Ladder> {
    let path = file.unwrap_or(Path::new("targets"));
    if let Some(e) = crate::io::links::check(targets, path, None)
        .into_iter()
        .next()
    {
        return Err(link_error(file, e));
    }
    let by_name: BTreeMap<&str, &Target> = targets.iter().map(|t| (t.name.as_str(), t)).collect();
    let pm = settings.methods.get::<PulsatorMethod>();
    let xm = settings.methods.get::<ParallaxMethod>();
    let tm = settings.methods.get::<TransientMethod>();
    let mut left_out: Vec<(String, String)> = Vec::new();
    let mut notes: Vec<String> = Vec::new();

    // The host node of each transient with a host link.
    let mut host_node: BTreeMap<&str, String> = BTreeMap::new();
    for t in targets
        .iter()
        .filter(|t| t.kind == Kind::Transient && !t.host.is_empty())
    {
        let h = by_name[t.host.as_str()];
        match h.kind {
            Kind::Pulsator => {
                host_node.insert(t.name.as_str(), node_of(h));
            }
            Kind::Field => {
                host_node.insert(t.name.as_str(), h.name.clone());
            }
            k => {
                let line = file
                    .and_then(|f| std::fs::read_to_string(f).ok().map(|x| (f, x)))
                    .and_then(|(f, x)| crate::io::links::line_of(&x, f, &t.name));
                return Err(RungError::InFile {
                    loc: Location {
                        file: file.map(Path::to_path_buf),
                        line,
                        field: Some("host".into()),
                    },
                    msg: format!(
                        "'{}' is a {} target: a host is a field of pulsators (or a pulsator standing for one)",
                        h.name,
                        k.as_str()
                    ),
                });
            }
        }
    }

    // Phase 1: pulsators and their parallaxes, planned on all cores.
    let pulsators: Vec<&Target> = targets
        .iter()
        .filter(|t| t.kind == Kind::Pulsator)
        .collect();
    // The fields' plans (one per field, all its stars together: the plan
    // the budget, the Phase view and `rung phase --field` give).
    let links = crate::ladder::field::link(targets);
    let field_reports: BTreeMap<String, Result<crate::ladder::field::FieldReport>> = {
        use rayon::prelude::*;
        links
            .groups
            .par_iter()
            .filter(|g| !g.members.is_empty())
            .map(|g| {
                (
                    targets[g.field].name.clone(),
                    settings.field_report(targets, g),
                )
            })
            .collect::<Vec<_>>()
            .into_iter()
            .collect()
    };
    // Each field's star → its field's row.
    let field_of: HashMap<&str, &Target> = links
        .groups
        .iter()
        .flat_map(|g| {
            g.members
                .iter()
                .map(move |&m| (targets[m].name.as_str(), &targets[g.field]))
        })
        .collect();
    let field_phot = |i: usize| -> Option<Result<Phot>> {
        let t = &targets[i];
        let why = match links.role(i) {
            crate::ladder::field::Role::Member(g) => {
                let name = &targets[g.field].name;
                match field_reports.get(name) {
                    Some(Ok(fr)) => {
                        let counted = fr
                            .stars
                            .iter()
                            .filter(|s| s.excluded.is_none() && s.sigma_mean_mag.is_some())
                            .count()
                            .max(1);
                        let star = fr.stars.iter().find(|s| s.name == t.name);
                        return Some(match star {
                            Some(s) if s.excluded.is_some() => Err(RungError::invalid(
                                format!("star '{}' of field '{name}'", t.name),
                                s.excluded.clone().unwrap_or_default(),
                            )),
                            Some(s) => match s.sigma_mean_mag {
                                Some(sm) if sm.is_finite() => Ok(Phot::Field {
                                    sigma_mean_mag: sm,
                                    hours: fr.prediction.hours_needed / counted as f64,
                                    field: name.clone(),
                                    points: s.points,
                                }),
                                _ => Err(RungError::invalid(
                                    format!("star '{}' of field '{name}'", t.name),
                                    "its field's plan gives it no mean magnitude in the range",
                                )),
                            },
                            None => Err(RungError::invalid(
                                format!("star '{}'", t.name),
                                format!("not in the plan of field '{name}'"),
                            )),
                        });
                    }
                    Some(Err(e)) => format!("the plan of its field '{name}' failed: {e}"),
                    None => format!("field '{name}' has no plan"),
                }
            }
            crate::ladder::field::Role::Refused(why) => why.to_string(),
            _ => return None,
        };
        Some(Err(RungError::invalid(format!("target '{}'", t.name), why)))
    };
    // A field's star takes its mean magnitude from its field's plan.
    let mut from_field: Vec<Option<Result<Phot>>> = targets
        .iter()
        .enumerate()
        .filter(|(_, t)| t.kind == Kind::Pulsator)
        .map(|(i, _)| field_phot(i))
        .collect();
    type Plans = (Result<Phot>, Option<Result<Planned>>);
    let plans1: Vec<Plans> = {
        use rayon::prelude::*;
        pulsators
            .par_iter()
            .zip(from_field.par_iter_mut())
            .map(|(t, ff)| {
                let phot = match (ff.take(), pm) {
                    (Some(f), _) => f,
                    (None, Some(m)) => plan(settings, m, t).map(|p| Phot::Own(Box::new(p))),
                    (None, None) => Err(RungError::invalid("pulsator method", "not configured")),
                };
                let plx = match (t.parallax_mas, t.parallax_err_mas, xm) {
                    (Some(_), None, Some(m)) => {
                        let mut v = (*t).clone();
                        v.kind = Kind::Parallax;
                        v.mag = t.mean_mag;
                        Some(plan(settings, m, &v))
                    }
                    _ => None,
                };
                (phot, plx)
            })
            .collect()
    };

    let mut chain = Chain::default();
    let mut members: Vec<Member> = Vec::new();
    let mut steps: Vec<Step> = Vec::new();
    let mut relations: BTreeMap<String, Relation> = BTreeMap::new();
    // Each node's metallicity uncertainty and γ (the stars of a node share
    // one metallicity: its error does not average down over them).
    let mut node_feh: BTreeMap<String, (Rung, f64)> = BTreeMap::new();
    // Each field's fractional extinction error (one reddening for the
    // field: common to its stars, it does not average down either).
    let mut node_ext: BTreeMap<String, (Rung, f64)> = BTreeMap::new();
    // The mean-magnitude observations of each field's stars.
    let mut field_obs: BTreeMap<String, Vec<FieldObs>> = BTreeMap::new();

    for (t, (phot, plx)) in pulsators.iter().zip(plans1) {
        let Some(pmeth) = pm else { break };
        let Some(mean) = t.mean_mag else {
            left_out.push((
                t.name.clone(),
                "no mean_mag: a pulsator's distance needs its mean magnitude".into(),
            ));
            continue;
        };
        // A star of a field takes the field's metallicity where it gives
        // none (the rule of the field's plan, `field::take_field_metallicity`).
        let sr = match Star::from_target(t).and_then(|mut star| {
            if let Some(f) = field_of.get(t.name.as_str()) {
                crate::ladder::field::take_field_metallicity(
                    &mut star.feh_dex,
                    &mut star.feh_err_dex,
                    f,
                    &settings.fields,
                );
            }
            star.relation(&pmeth.config)
        }) {
            Ok(r) => r,
            Err(e) => {
                left_out.push((
                    t.name.clone(),
                    format!("no period–luminosity relation: {e}"),
                ));
                continue;
            }
        };
        let p = t.period_d.unwrap_or(10.0);
        let phot = match phot {
            Ok(x) => x,
            Err(e) => {
                left_out.push((t.name.clone(), format!("its plan failed: {e}")));
                continue;
            }
        };
        if let Phot::Own(pl) = &phot
            && !pl.prediction.distance_precision_pct.is_finite()
        {
            left_out.push((
                t.name.clone(),
                "its plan gives no mean magnitude in the range".into(),
            ));
            continue;
        }
        let law = &sr.relation;
        let rel = relation_name(law);
        relations.insert(rel.clone(), law.clone());
        let node = node_of(t);
        let anchor = t.parallax_mas.is_some();
        let rung = if anchor { Rung::Anchor } else { Rung::Host };
        let x = p.log10() - law.pivot_log_p;
        let dz = sr.feh_dex - law.feh_ref_dex;
        let mut obs_idx = Vec::new();
        let mut hours = 0.0;
        // The parallax first: it is what makes an anchor.
        if let Some(plx_mas) = t.parallax_mas {
            let given = t.parallax_err_mas;
            let (terms, h, planned) = match (given, plx) {
                (Some(err), _) => (
                    vec![Term::new("parallax (given)", MAG_PER_LN * err / plx_mas)],
                    0.0,
                    None,
                ),
                (None, Some(Ok(pl))) if pl.prediction.distance_precision_pct.is_finite() => {
                    if pl.fallback {
                        notes.push(format!(
                            "{}: its parallax goal is out of reach in the range; the ladder counts what the parallax method's proposal buys ({:.1} %)",
                            t.name, pl.prediction.distance_precision_pct
                        ));
                    }
                    (
                        own_terms(&pl.prediction, &[]),
                        pl.prediction.hours_needed,
                        Some(pl),
                    )
                }
                (None, Some(Ok(_))) => {
                    left_out.push((t.name.clone(), "its parallax plan reaches no precision in the range (give parallax_err_mas for a parallax already measured)".into()));
                    continue;
                }
                (None, Some(Err(e))) => {
                    left_out.push((t.name.clone(), format!("its parallax plan failed: {e}")));
                    continue;
                }
                (None, None) => {
                    left_out.push((t.name.clone(), "no parallax method configured".into()));
                    continue;
                }
            };
            let frac = given.map_or_else(
                || {
                    planned
                        .as_ref()
                        .map_or(0.0, |p| p.prediction.distance_precision_pct / 100.0)
                },
                |e| e / plx_mas,
            );
            if frac > MAX_PARALLAX_FRAC {
                left_out.push((
                    t.name.clone(),
                    format!(
                        "σϖ/ϖ = {:.0} %, past the {:.0} % an anchor may have: the modulus of so poor a parallax is biased beyond what a linear fit carries (Lutz & Kelker 1973)",
                        100.0 * frac,
                        100.0 * MAX_PARALLAX_FRAC
                    ),
                ));
                continue;
            }
            if frac > WARN_PARALLAX_FRAC {
                notes.push(format!(
                    "{}: σϖ/ϖ = {:.0} %, past 10 %: the modulus of its parallax is used to first order; its second-order bias is {:+.3} mag and the Lutz–Kelker bias, which rung does not correct, grows quickly from here",
                    t.name,
                    100.0 * frac,
                    super::model::parallax_modulus_bias_mag(frac)
                ));
            }
            let (mu, _) = super::model::parallax_modulus(plx_mas, 1.0);
            let j = chain.observations.len();
            chain.observations.push(Observation {
                target: t.name.clone(),
                node: Some(node.clone()),
                rung: Rung::Anchor,
                what: "parallax".into(),
                value_mag: mu,
                offset_mag: 0.0,
                coeffs: vec![(Param::Modulus { node: node.clone() }, 1.0)],
                terms,
                hours: h,
            });
            obs_idx.push(j);
            hours += h;
            if let Some(pl) = planned
                && let Some(more) = &pl.one_more
            {
                steps.push(Step {
                    label: format!("one more parallax epoch of {}", t.name),
                    rung: Rung::Anchor,
                    target: t.name.clone(),
                    hours: (more.hours_needed - pl.prediction.hours_needed).max(0.0),
                    change: Change::Sharper {
                        observation: j,
                        terms: own_terms(more, &[]),
                    },
                });
            }
        }
        let phot_hours = match &phot {
            Phot::Own(pl) => pl.prediction.hours_needed,
            Phot::Field { hours, .. } => *hours,
        };
        let j = chain.observations.len();
        chain.observations.push(Observation {
            target: t.name.clone(),
            node: Some(node.clone()),
            rung,
            what: "mean magnitude".into(),
            value_mag: mean
                - if law.reddening_free() {
                    0.0
                } else {
                    t.extinction_mag
                },
            offset_mag: law.slope * x + law.feh_coeff_mag_per_dex * dz,
            coeffs: {
                let mut c = vec![
                    (Param::Modulus { node: node.clone() }, 1.0),
                    (
                        Param::ZeroPoint {
                            relation: rel.clone(),
                        },
                        1.0,
                    ),
                ];
                if law.slope_err > 0.0 && x != 0.0 {
                    c.push((
                        Param::Slope {
                            relation: rel.clone(),
                        },
                        x,
                    ));
                }
                if law.feh_coeff_err_mag_per_dex > 0.0 && dz != 0.0 {
                    c.push((
                        Param::FehCoeff {
                            relation: rel.clone(),
                        },
                        dz,
                    ));
                }
                let ext_frac = pmeth.config.defaults.extinction_sigma_frac;
                if matches!(phot, Phot::Field { .. })
                    && !law.reddening_free()
                    && t.extinction_mag > 0.0
                    && ext_frac > 0.0
                {
                    c.push((Param::Extinction { node: node.clone() }, t.extinction_mag));
                    node_ext.entry(node.clone()).or_insert((rung, ext_frac));
                }
                if law.feh_coeff_mag_per_dex != 0.0 && sr.feh_err_dex > 0.0 {
                    c.push((
                        Param::Metallicity { node: node.clone() },
                        law.feh_coeff_mag_per_dex,
                    ));
                    let e = node_feh.entry(node.clone()).or_insert((rung, 0.0));
                    e.1 = e.1.max(sr.feh_err_dex);
                }
                c
            },
            terms: match &phot {
                Phot::Own(pl) => own_terms(&pl.prediction, &[FEH_TERM]),
                Phot::Field { sigma_mean_mag, .. } => vec![
                    Term::new("relation scatter", law.scatter_mag),
                    Term::new("mean magnitude", *sigma_mean_mag),
                ],
            },
            hours: phot_hours,
        });
        obs_idx.push(j);
        hours += phot_hours;
        if let Phot::Field {
            sigma_mean_mag,
            field,
            points,
            ..
        } = &phot
        {
            field_obs.entry(field.clone()).or_default().push(FieldObs {
                observation: j,
                sigma_mean_mag: *sigma_mean_mag,
                points: *points,
                scatter_mag: law.scatter_mag,
                rung,
            });
        }
        if let Phot::Own(phot) = &phot
            && let Some(more) = &phot.one_more
        {
            steps.push(Step {
                label: format!("one more light-curve visit of {}", t.name),
                rung,
                target: t.name.clone(),
                hours: (more.hours_needed - phot.prediction.hours_needed).max(0.0),
                change: Change::Sharper {
                    observation: j,
                    terms: own_terms(more, &[FEH_TERM]),
                },
            });
        }
        members.push(Member {
            target: t.name.clone(),
            kind: t.kind,
            role: if anchor { Role::Anchor } else { Role::HostStar },
            node: Some(node),
            relation: rel,
            observations: obs_idx,
            hours,
        });
    }
    for (rel, law) in &relations {
        let prior = |p: Param, what: &str, term: &str, sigma: f64| Observation {
            target: rel.clone(),
            node: None,
            rung: Rung::Relation,
            what: what.into(),
            value_mag: 0.0,
            offset_mag: 0.0,
            coeffs: vec![(p, 1.0)],
            terms: vec![Term::new(term, sigma)],
            hours: 0.0,
        };
        let used = |c: &Chain, p: &Param| {
            c.observations
                .iter()
                .any(|o| o.coeffs.iter().any(|(q, _)| q == p))
        };
        let slope = Param::Slope {
            relation: rel.clone(),
        };
        if used(&chain, &slope) {
            let o = prior(slope, "published slope", "slope", law.slope_err);
            chain.observations.push(o);
        }
        let feh = Param::FehCoeff {
            relation: rel.clone(),
        };
        if used(&chain, &feh) {
            let o = prior(
                feh,
                "published metallicity term",
                "metallicity term",
                law.feh_coeff_err_mag_per_dex,
            );
            chain.observations.push(o);
        }
    }
    // One more visit of each field (each of its pointings once): every star
    // it measures gets one more phase point.
    for (field, obs) in &field_obs {
        if let Some(Ok(fr)) = field_reports.get(field) {
            steps.extend(field_visit_step(field, fr, obs));
        }
    }
    for (node, (rung, frac)) in &node_ext {
        chain.observations.push(Observation {
            target: node.clone(),
            node: Some(node.clone()),
            rung: *rung,
            what: "extinction".into(),
            value_mag: 0.0,
            offset_mag: 0.0,
            coeffs: vec![(Param::Extinction { node: node.clone() }, 1.0)],
            terms: vec![Term::new("extinction", *frac)],
            hours: 0.0,
        });
    }
    for (node, (rung, err)) in &node_feh {
        chain.observations.push(Observation {
            target: node.clone(),
            node: Some(node.clone()),
            rung: *rung,
            what: "metallicity".into(),
            value_mag: 0.0,
            offset_mag: 0.0,
            coeffs: vec![(Param::Metallicity { node: node.clone() }, 1.0)],
            terms: vec![Term::new("metallicity", *err)],
            hours: 0.0,
        });
    }
    // The hosts' expected moduli, for the supernovae's planned values.
    let mut host_moduli: BTreeMap<String, HostModulus> = match chain.solve() {
        Ok(sol) => sol
            .params
            .iter()
            .zip(&sol.estimate_mag)
            .enumerate()
            .filter_map(|(i, (p, v))| match p {
                Param::Modulus { node } => Some((
                    node.clone(),
                    HostModulus {
                        modulus_mag: *v,
                        sigma_mag: sol.covariance[i][i].max(0.0).sqrt(),
                        source: SOURCE_CHAIN.into(),
                    },
                )),
                _ => None,
            })
            .collect(),
        Err(ChainError::BadObservation { target, what, why }) => {
            return Err(RungError::invalid(
                format!("ladder observation '{what}' of {target}"),
                why,
            ));
        }
        Err(_) => BTreeMap::new(),
    };
    // A field the chain leaves open (no anchor fixes its relation): its own
    // plan's distance with the published zero point, as `rung phase --field`.
    for (name, fr) in &field_reports {
        if let Ok(fr) = fr
            && let Some(d) = &fr.distance
            && d.distance_modulus_mag.is_finite()
        {
            host_moduli
                .entry(name.clone())
                .or_insert_with(|| HostModulus {
                    modulus_mag: d.distance_modulus_mag,
                    sigma_mag: d.sigma_mu_mag,
                    source: SOURCE_FIELD.into(),
                });
        }
    }
    let host_mu: BTreeMap<String, (f64, f64)> = host_moduli
        .iter()
        .map(|(k, m)| (k.clone(), (m.modulus_mag, m.sigma_mag)))
        .collect();

    // Phase 2: supernovae.
    let transients: Vec<&Target> = targets
        .iter()
        .filter(|t| t.kind == Kind::Transient)
        .collect();
    let h0_ref = tm.map_or(70.0, |m| m.cfg.cosmology.h0_km_s_mpc);
    let mut peaks: BTreeMap<String, CalibratorPeak> = BTreeMap::new();
    let mut flow_measured: Vec<String> = Vec::new();
    if let Some(tmeth) = tm {
        let std = tmeth.standardizer()?;
        let zp = ZeroPoint::configured(&tmeth.cfg, tmeth.relation());
        let sname = tmeth.relation().as_str().to_string();
        let peak = Param::PeakMag {
            standardization: sname.clone(),
        };
        // What each transient is, and the view of it its method plans.
        let mut views: Vec<(&Target, Role, Option<String>, Target)> = Vec::new();
        for t in &transients {
            let mut v = (*t).clone();
            if let Some(node) = host_node.get(t.name.as_str()) {
                match host_mu.get(node) {
                    Some((mu, s)) => {
                        v.host_mu_mag = Some(*mu);
                        v.host_mu_err_mag = Some(*s);
                    }
                    None => {
                        // The host has no distance yet: plan it as a calibrator
                        // all the same; the chain says what is open.
                        v.host_mu_mag = Some(t.host_mu_mag.unwrap_or(30.0));
                        v.host_mu_err_mag = Some(t.host_mu_err_mag.unwrap_or(0.1));
                    }
                }
                views.push((t, Role::Calibrator, Some(node.clone()), v));
            } else if t.host_mu_mag.is_some() && t.host_mu_err_mag.is_some() {
                views.push((t, Role::Calibrator, Some(format!("host of {}", t.name)), v));
            } else if t.redshift.is_some_and(|z| z > 0.0) {
                views.push((t, Role::HubbleFlow, None, v));
            } else {
                left_out.push((
                    t.name.clone(),
                    "no host and no redshift: neither a calibrator nor in the Hubble flow".into(),
                ));
            }
        }
        // A supernova already observed (its peak's error given) is not chased.
        let plans2: Vec<Option<Result<Planned>>> = {
            use rayon::prelude::*;
            views
                .par_iter()
                .map(|(t, _, _, v)| t.peak_err_mag.is_none().then(|| plan(settings, tmeth, v)))
                .collect()
        };
        for ((t, role, node, v), pl) in views.iter().zip(plans2) {
            let (terms_of, hours, planned): (TermsOf, f64, Option<Planned>) = match (
                pl,
                t.peak_err_mag,
            ) {
                (None, Some(err)) => match tmeth.observed_terms(v, err) {
                    // Already observed: the terms its chase would carry,
                    // the fit's being the given error.
                    Ok(all) => (
                        Box::new(move |drop: &[&str]| {
                            all.iter()
                                .filter(|e| !e.shared && !drop.contains(&e.name.as_str()))
                                .map(|e| Term::new(e.name.clone(), e.sigma_mag))
                                .collect()
                        }),
                        0.0,
                        None,
                    ),
                    Err(e) => {
                        left_out.push((
                            t.name.clone(),
                            format!("its given peak cannot be standardized: {e}"),
                        ));
                        continue;
                    }
                },
                (Some(Ok(p)), _) if p.prediction.distance_precision_pct.is_finite() => {
                    let pred = p.prediction.clone();
                    (
                        Box::new(move |drop: &[&str]| own_terms(&pred, drop)),
                        p.prediction.hours_needed,
                        Some(p),
                    )
                }
                (Some(Err(e)), _) => {
                    left_out.push((t.name.clone(), format!("its chase failed: {e}")));
                    continue;
                }
                _ => {
                    left_out.push((t.name.clone(), "its chase gives no distance in the range (give peak_err_mag for a supernova already observed)".into()));
                    continue;
                }
            };
            let mut obs_idx = Vec::new();
            let (obs, rung) = match role {
                Role::Calibrator => {
                    let node = node.clone().unwrap_or_default();
                    let linked = host_node.contains_key(t.name.as_str());
                    let mu = host_mu
                        .get(&node)
                        .map_or(v.host_mu_mag.unwrap_or(0.0), |x| x.0);
                    // A peak given (measured, or the observer's forecast):
                    // standardized as the chase standardizes it, so the M_B
                    // it calibrates follows it; else the planned value.
                    let value_mag = match tmeth.standardized_peak(v) {
                        Ok(Some(sp)) => {
                            let m_b = sp.standardized_peak_mag - mu;
                            if (m_b - zp.abs_mag).abs() > MB_WARN_MAG {
                                notes.push(format!(
                                    "{}: the M_B {m_b:.2} mag its given peak measures in {node} differs from the zero point {:.2} mag by more than {MB_WARN_MAG} mag: extra extinction, a peculiar event, a wrong host or a wrong peak",
                                    t.name, zp.abs_mag
                                ));
                            }
                            peaks.insert(
                                t.name.clone(),
                                CalibratorPeak {
                                    peak: sp,
                                    observed: t.peak_err_mag.is_some(),
                                },
                            );
                            sp.standardized_peak_mag
                        }
                        Ok(None) if t.peak_err_mag.is_some() => {
                            left_out.push((
                                t.name.clone(),
                                "peak_err_mag is given without peak_mag: a calibrator already observed measures M_B from its peak, so give the peak it was fitted with".into(),
                            ));
                            continue;
                        }
                        Ok(None) => mu + zp.abs_mag,
                        Err(e) => {
                            left_out.push((
                                t.name.clone(),
                                format!("its given peak cannot be standardized: {e}"),
                            ));
                            continue;
                        }
                    };
                    if !linked {
                        // A host distance given with the supernova: the node's own row.
                        obs_idx.push(chain.observations.len());
                        chain.observations.push(Observation {
                            target: t.name.clone(),
                            node: Some(node.clone()),
                            rung: Rung::Host,
                            what: "host distance (given)".into(),
                            value_mag: v.host_mu_mag.unwrap_or(0.0),
                            offset_mag: 0.0,
                            coeffs: vec![(Param::Modulus { node: node.clone() }, 1.0)],
                            terms: vec![Term::new(
                                "host distance (given)",
                                v.host_mu_err_mag.unwrap_or(0.0),
                            )],
                            hours: 0.0,
                        });
                    }
                    (
                        Observation {
                            target: t.name.clone(),
                            node: Some(node.clone()),
                            rung: Rung::Calibrator,
                            what: "standardized peak".into(),
                            value_mag,
                            offset_mag: 0.0,
                            coeffs: vec![
                                (Param::Modulus { node: node.clone() }, 1.0),
                                (peak.clone(), 1.0),
                            ],
                            terms: terms_of(&[HOST_TERM, PEC_TERM]),
                            hours,
                        },
                        Rung::Calibrator,
                    )
                }
                _ => {
                    let z = t.redshift.unwrap_or(0.0);
                    let dl = std.cosmology.luminosity_distance_mpc(z)?;
                    let mu = 5.0 * dl.log10() + 25.0;
                    let terms = terms_of(&[HOST_TERM]);
                    // A supernova already observed measures the flow: its
                    // fitted peak standardized as its chase standardizes it
                    // (a calibrator's way), its error the terms its chase
                    // would carry with the fit's given (its peculiar
                    // velocity among them); the others take the planned
                    // value, on the H0_ref scale by construction.
                    let value_mag = if t.peak_err_mag.is_some() {
                        match tmeth.standardized_peak(v) {
                            Ok(Some(sp)) => {
                                flow_measured.push(t.name.clone());
                                sp.standardized_peak_mag
                            }
                            Ok(None) => {
                                left_out.push((
                                    t.name.clone(),
                                    "peak_err_mag is given without peak_mag: a supernova already observed measures the Hubble flow from its peak, so give the peak it was fitted with".into(),
                                ));
                                continue;
                            }
                            Err(e) => {
                                left_out.push((
                                    t.name.clone(),
                                    format!("its given peak cannot be standardized: {e}"),
                                ));
                                continue;
                            }
                        }
                    } else {
                        mu + zp.abs_mag
                    };
                    (
                        Observation {
                            target: t.name.clone(),
                            node: None,
                            rung: Rung::HubbleFlow,
                            what: "standardized peak".into(),
                            value_mag,
                            offset_mag: 5.0 * (h0_ref * dl).log10() + 25.0,
                            coeffs: vec![(peak.clone(), 1.0), (Param::Hubble, -1.0)],
                            terms,
                            hours,
                        },
                        Rung::HubbleFlow,
                    )
                }
            };
            let drop: &[&str] = if rung == Rung::Calibrator {
                &[HOST_TERM, PEC_TERM]
            } else {
                &[HOST_TERM]
            };
            let j = chain.observations.len();
            chain.observations.push(obs);
            obs_idx.push(j);
            if let Some(pl) = &planned
                && let Some(more) = &pl.one_more
            {
                steps.push(Step {
                    label: format!("one more epoch of {}", t.name),
                    rung,
                    target: t.name.clone(),
                    hours: (more.hours_needed - pl.prediction.hours_needed).max(0.0),
                    change: Change::Sharper {
                        observation: j,
                        terms: own_terms(more, drop),
                    },
                });
            }
            members.push(Member {
                target: t.name.clone(),
                kind: t.kind,
                role: *role,
                node: node.clone(),
                relation: sname.clone(),
                observations: obs_idx,
                hours,
            });
        }
    }
    steps.extend(like_the_planned(&chain, &members));
    Ok(Ladder {
        chain,
        members,
        left_out,
        notes,
        steps,
        h0_ref_km_s_mpc: h0_ref,
        host_moduli,
        peaks,
        flow_measured,
    })
}

/// The median of a list by a key (the lower middle).
fn median_by<'a, T>(v: &[&'a T], key: impl Fn(&T) -> f64) -> Option<&'a T> {
    let mut v = v.to_vec();
    v.sort_by(|a, b| key(a).total_cmp(&key(b)));
    v.get(v.len().saturating_sub(1) / 2).copied()
}

/// Steps that add a target like the planned ones: a new anchor like the
/// median anchor, a new star in each host node like its median star, a new
/// calibrator in each host node with stars like the median calibrator, a new
/// Hubble-flow supernova like the median one. Each costs the hours of the
/// target it copies.
fn like_the_planned(chain: &Chain, members: &[Member]) -> Vec<Step> {
    let obs = |m: &Member, what: &str| {
        m.observations
            .iter()
            .map(|j| &chain.observations[*j])
            .find(|o| o.what == what)
            .cloned()
    };
    let sigma = |m: &Member| {
        m.observations
            .iter()
            .map(|j| chain.observations[*j].sigma_mag().powi(2))
            .sum::<f64>()
    };
    let mut out = Vec::new();
    let anchors: Vec<&Member> = members.iter().filter(|m| m.role == Role::Anchor).collect();
    if let Some(a) = median_by(&anchors, sigma) {
        let node = "a new anchor".to_string();
        let mut rows: Vec<Observation> = a
            .observations
            .iter()
            .map(|j| chain.observations[*j].clone())
            .collect();
        for r in &mut rows {
            r.target = node.clone();
            r.node = Some(node.clone());
            for (p, _) in &mut r.coeffs {
                if let Param::Modulus { node: n } = p {
                    *n = node.clone();
                }
            }
        }
        out.push(Step {
            label: format!("a new anchor like {}", a.target),
            rung: Rung::Anchor,
            target: a.target.clone(),
            hours: a.hours,
            change: Change::Added { observations: rows },
        });
    }
    let mut nodes: BTreeMap<&str, Vec<&Member>> = BTreeMap::new();
    for m in members.iter().filter(|m| m.role == Role::HostStar) {
        if let Some(n) = &m.node {
            nodes.entry(n.as_str()).or_default().push(m);
        }
    }
    let cals: Vec<&Member> = members
        .iter()
        .filter(|m| m.role == Role::Calibrator)
        .collect();
    let cal_nodes: std::collections::BTreeSet<&str> =
        cals.iter().filter_map(|m| m.node.as_deref()).collect();
    for (node, stars) in &nodes {
        // A node no supernova uses is not on the way to any end point but its own.
        if !cal_nodes.contains(node) {
            continue;
        }
        if let Some(s) = median_by(stars, sigma)
            && let Some(mut o) = obs(s, "mean magnitude")
        {
            o.target = format!("a new star in {node}");
            out.push(Step {
                label: format!("a new star in {node} like {}", s.target),
                rung: Rung::Host,
                target: node.to_string(),
                hours: s.hours,
                change: Change::Added {
                    observations: vec![o],
                },
            });
        }
        if let Some(c) = median_by(&cals, sigma)
            && let Some(mut o) = obs(c, "standardized peak")
        {
            o.target = format!("a new calibrator in {node}");
            o.node = Some(node.to_string());
            for (p, _) in &mut o.coeffs {
                if let Param::Modulus { node: n } = p {
                    *n = node.to_string();
                }
            }
            out.push(Step {
                label: format!("a new calibrator in {node} like {}", c.target),
                rung: Rung::Calibrator,
                target: node.to_string(),
                hours: c.hours,
                change: Change::Added {
                    observations: vec![o],
                },
            });
        }
    }
    let flow: Vec<&Member> = members
        .iter()
        .filter(|m| m.role == Role::HubbleFlow)
        .collect();
    if let Some(f) = median_by(&flow, sigma)
        && let Some(mut o) = obs(f, "standardized peak")
    {
        o.target = "a new Hubble-flow supernova".into();
        out.push(Step {
            label: format!("a new Hubble-flow supernova like {}", f.target),
            rung: Rung::HubbleFlow,
            target: f.target.clone(),
            hours: f.hours,
            change: Change::Added {
                observations: vec![o],
            },
        });
    }
    out
}

/// Set `r.anchored` (or `r.anchored_why`): the field's distance on the
/// zero point the programme's anchors fix, the number `rung ladder`
/// gives (`ladder::chain::build` on `programme`, its planned host
/// moduli; the same as `ladder::chain::host_distance`), when the anchors
/// fix its relation. The field's own distance stays on the relation's
/// published zero point; both are shown, each with its zero point named.
/// A ladder that cannot be built leaves the report as it is, with the
/// reason in `anchored_why`.
pub fn anchor_field(
    settings: &crate::programme::Settings,
    r: &mut crate::ladder::field::FieldReport,
    programme: &[Target],
    file: Option<&Path>,
) {
    use crate::ladder::field::{AnchoredDistance, ZERO_POINT_ANCHORED};
    r.anchored = None;
    r.anchored_why = None;
    match build(settings, programme, file) {
        Ok(l) => match l.host_moduli.get(&r.field) {
            Some(m) if m.source == SOURCE_CHAIN => {
                r.anchored = Some(AnchoredDistance {
                    distance_modulus_mag: m.modulus_mag,
                    sigma_mu_mag: m.sigma_mag,
                    distance_pc: 10f64.powf(m.modulus_mag / 5.0 + 1.0),
                    distance_precision_pct: 100.0
                        * crate::ladder::DIST_FRAC_PER_MAG
                        * m.sigma_mag,
                    zero_point: ZERO_POINT_ANCHORED.to_string(),
                })
            }
            _ => {
                r.anchored_why = Some(
                    "no anchor of the programme fixes its relation's zero point (a star with a parallax using the same relation and band): rung ladder leaves it open"
                        .to_string(),
                )
            }
        },
        Err(e) => r.anchored_why = Some(format!("the ladder: {e}")),
    }
}
