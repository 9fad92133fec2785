//! Everything the Ladder view and `rung ladder` show, computed once: the
//! chosen end point's value, σ and budget by rung and term, every node's and
//! every supernova's distance with its own and shared σ, the parameters, the
//! open links, and the steps ranked by what an hour of each buys.

use super::build::{Ladder, Member, Role, build};
use super::model::{Budget, EndPoint, Observation, Param, Rung, h0_from_intercept};
use super::next::{Change, Ranked, rank};
use crate::error::Result;
use crate::io::targets::Target;
use crate::ladder::DIST_FRAC_PER_MAG;
use crate::programme::Settings;
use serde::Serialize;
use std::path::Path;

/// A solved parameter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ParamRow {
    /// The parameter.
    #[serde(flatten)]
    pub param: Param,
    /// In words.
    pub text: String,
    /// Its estimate, mag.
    pub value_mag: f64,
    /// Its σ, mag.
    pub sigma_mag: f64,
}

/// A link the programme leaves open.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OpenRow {
    /// The parameter no observation fixes.
    #[serde(flatten)]
    pub param: Param,
    /// Why.
    pub why: String,
}

/// Where a distance of the ladder is listed: the rung its node or supernova
/// stands on, with single pulsators (neither an anchor nor a supernova's
/// host: the chain carries their distances, they calibrate nothing) apart
/// from the host fields.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Section {
    /// Nodes with a parallax.
    Anchors,
    /// Fields of pulsators, and any node a supernova names as its host.
    HostFields,
    /// Single pulsators without a parallax that no supernova names as host.
    Pulsators,
    /// Supernovae in hosts with a distance.
    Calibrators,
    /// Supernovae whose redshift gives the distance.
    HubbleFlow,
}

impl Section {
    /// Every section, in ladder order.
    pub const ALL: [Section; 5] = [
        Section::Anchors,
        Section::HostFields,
        Section::Pulsators,
        Section::Calibrators,
        Section::HubbleFlow,
    ];
    /// The machine label (JSON).
    pub fn label(self) -> &'static str {
        match self {
            Section::Anchors => "anchors",
            Section::HostFields => "host_fields",
            Section::Pulsators => "pulsators",
            Section::Calibrators => "calibrators",
            Section::HubbleFlow => "hubble_flow",
        }
    }
    /// The section in words, for tables and views.
    pub fn text(self) -> &'static str {
        match self {
            Section::Anchors => "anchors",
            Section::HostFields => "host fields",
            Section::Pulsators => "pulsators",
            Section::Calibrators => "calibrators",
            Section::HubbleFlow => "Hubble flow",
        }
    }
    /// What the section holds, in one line (text output and the Ladder
    /// view say the same).
    pub fn meaning(self) -> &'static str {
        match self {
            Section::Anchors => "pulsators with a parallax: they fix their relation's zero point",
            Section::HostFields => {
                "fields of pulsators (and hosts a supernova names): their distances through the relation"
            }
            Section::Pulsators => {
                "single pulsators with neither a parallax nor a supernova: the chain carries their distances, they calibrate nothing"
            }
            Section::Calibrators => "supernovae in hosts with a distance: they calibrate the peak",
            Section::HubbleFlow => "supernovae whose redshift gives the distance",
        }
    }
}

/// One distance of the ladder with its σ split into own and shared.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DistanceRow {
    /// The node or supernova.
    pub name: String,
    /// Its rung in the chain (anchor or host for a node; calibrator or
    /// Hubble flow for a supernova). A single pulsator's rung is `host`, as
    /// before; `section` tells it apart.
    pub rung: Rung,
    /// Where it is listed (`pulsators` for a single pulsator that is
    /// neither an anchor nor a supernova's host).
    pub section: Section,
    /// Distance modulus, mag.
    pub modulus_mag: f64,
    /// Distance, Mpc: 10^(μ/5 + 1) pc.
    pub distance_mpc: f64,
    /// σ of the modulus, mag.
    pub sigma_mag: f64,
    /// σ_d/d, percent.
    pub distance_pct: f64,
    /// From its own observations, mag.
    pub own_sigma_mag: f64,
    /// From the rungs below (shared with every distance calibrated alike), mag.
    pub shared_sigma_mag: f64,
    /// Its own part as σ_d/d, percent.
    pub own_pct: f64,
    /// Its shared part as σ_d/d, percent.
    pub shared_pct: f64,
    /// Which zero point the modulus stands on: every distance of the ladder
    /// stands on the one its anchors fix ([`crate::ladder::field::ZERO_POINT_ANCHORED`]),
    /// where `rung phase --field` gives a field's own on the relation's
    /// published zero point.
    pub zero_point: String,
}

impl DistanceRow {
    fn from_budget(name: &str, rung: Rung, section: Section, b: &Budget) -> DistanceRow {
        let pct = |s: f64| 100.0 * DIST_FRAC_PER_MAG * s;
        DistanceRow {
            name: name.to_string(),
            rung,
            section,
            modulus_mag: b.value_mag,
            distance_mpc: 10f64.powf(b.value_mag / 5.0 + 1.0) / 1e6,
            sigma_mag: b.sigma_mag,
            distance_pct: b.distance_pct,
            own_sigma_mag: b.own_sigma_mag,
            shared_sigma_mag: b.shared_sigma_mag,
            own_pct: pct(b.own_sigma_mag),
            shared_pct: pct(b.shared_sigma_mag),
            zero_point: crate::ladder::field::ZERO_POINT_ANCHORED.to_string(),
        }
    }
}

/// A calibrator of the ladder: its host's planned distance and the peak
/// absolute magnitude it calibrates, with the error split into the host's
/// distance and the supernova's own (the same numbers `rung chase` gives it,
/// [`crate::ladder::transient::Chase::calibration`]).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CalibratorRow {
    /// The supernova.
    pub target: String,
    /// Its host node.
    pub host: String,
    /// The host's planned distance modulus, mag.
    pub host_mu_mag: f64,
    /// Its σ, mag.
    pub host_mu_err_mag: f64,
    /// Where the host's distance comes from, in words.
    pub host_source: String,
    /// The standardized peak absolute magnitude M_B it calibrates, mag.
    pub peak_abs_mag: f64,
    /// Its σ, mag.
    pub sigma_mag: f64,
    /// The part from the host's distance, mag.
    pub sigma_host_mag: f64,
    /// The part from the supernova's own observation, mag.
    pub sigma_own_mag: f64,
    /// Whether the supernova is already observed (`peak_err_mag` given):
    /// its M_B is then measured from its peak.
    pub observed: bool,
    /// Its given peak standardized as the chase standardizes it (`None`
    /// when no peak is given: M_B is then the planned value, the zero point).
    pub standardized_peak: Option<crate::ladder::transient::StandardizedPeak>,
    /// How M_B was found, in words (text, JSON and views say the same).
    pub peak_abs_mag_how: String,
}

impl CalibratorRow {
    /// How a calibrator's M_B is found, in words: from its standardized
    /// peak less its host's modulus, or the planned value.
    pub fn how_text(
        observed: bool,
        sp: Option<&crate::ladder::transient::StandardizedPeak>,
        host_mu_mag: f64,
        peak_abs_mag: f64,
    ) -> String {
        match sp {
            Some(p) => format!(
                "{}: B peak {:.3} − Milky-Way A_B {:.3} − standardization {:+.3} = {:.3}, less the host's μ {:.3} = {:.3} mag",
                if observed {
                    "measured from its given peak"
                } else {
                    "from its given peak (a forecast until observed)"
                },
                p.peak_b_mag,
                p.mw_extinction_b_mag,
                p.correction_mag,
                p.standardized_peak_mag,
                host_mu_mag,
                peak_abs_mag
            ),
            None => {
                "planned value: no peak given, so it calibrates the configured zero point".into()
            }
        }
    }
}

/// The calibrators of a built ladder, in the order of its members (what
/// `rung ladder` and, for a supernova already observed, `rung chase` show).
pub fn calibrators_of(l: &Ladder) -> Vec<CalibratorRow> {
    l.members
        .iter()
        .filter(|m| m.role == Role::Calibrator)
        .filter_map(|m| {
            let node = m.node.clone()?;
            let obs = |what: &str| {
                m.observations
                    .iter()
                    .map(|j| &l.chain.observations[*j])
                    .find(|o| o.what == what)
            };
            let peak = obs("standardized peak")?;
            let (mu, s, source) = match (l.host_moduli.get(&node), obs("host distance (given)")) {
                (_, Some(g)) => (
                    g.value_mag,
                    g.sigma_mag(),
                    "host_mu_mag ± host_mu_err_mag on its row".to_string(),
                ),
                (Some(h), None) => (h.modulus_mag, h.sigma_mag, h.source.clone()),
                (None, None) => return None,
            };
            let own = peak.sigma_mag();
            let given = l.peaks.get(&m.target);
            let observed = given.is_some_and(|g| g.observed);
            let sp = given.map(|g| g.peak);
            let m_b = peak.value_mag - peak.offset_mag - mu;
            Some(CalibratorRow {
                observed,
                standardized_peak: sp,
                peak_abs_mag_how: CalibratorRow::how_text(observed, sp.as_ref(), mu, m_b),
                target: m.target.clone(),
                host: node,
                host_mu_mag: mu,
                host_mu_err_mag: s,
                host_source: source,
                peak_abs_mag: m_b,
                sigma_mag: s.hypot(own),
                sigma_host_mag: s,
                sigma_own_mag: own,
            })
        })
        .collect()
}

/// Telescope hours planned on one rung.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RungHours {
    /// The rung.
    pub rung: Rung,
    /// Hours with overheads.
    pub hours: f64,
}

/// What one more hour on a target of the ladder buys at the end point:
/// its method's one more visit (`Method::one_more`: the repeat of a planned
/// epoch that buys most per hour), the chain solved again with it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Marginal {
    /// The target.
    pub target: String,
    /// Its role on the ladder.
    pub role: Role,
    /// The node it measures or sits in.
    pub node: Option<String>,
    /// The step, in words ("one more parallax epoch of LPO-A1"), when its
    /// method offers one.
    pub step: Option<String>,
    /// The step's telescope hours, with overheads.
    pub hours: Option<f64>,
    /// The fall of the end point's σ_d/d per hour of the step, percentage
    /// points per hour (0: the target does not feed the end point).
    pub gain_pct_per_hour: Option<f64>,
    /// Why there is no step.
    pub why: Option<String>,
}

/// The ladder's answer for a programme.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LadderReport {
    /// The end point asked for (or chosen: H0 when the chain closes to the
    /// Hubble flow, else the first host of a calibrator, else the first node).
    pub end_point: Budget,
    /// The end point in words.
    pub end_point_text: String,
    /// H0 from the intercept, km/s/Mpc, when the chain closes to the Hubble flow.
    pub h0_km_s_mpc: Option<f64>,
    /// Its σ_H0/H0, percent.
    pub h0_sigma_pct: Option<f64>,
    /// The H0 whose distance scale the supernovae's planned values are
    /// written on (the chase's configuration), km/s/Mpc: with planned values,
    /// the fit returns it when the anchors agree with the relations'
    /// published zero points.
    pub h0_ref_km_s_mpc: f64,
    /// What H0 rests on, in words: planned values on the `h0_ref_km_s_mpc`
    /// scale, or calibrators measured from their given peaks (text, JSON and
    /// the Ladder view say the same).
    pub h0_basis: String,
    /// Every node's distance (anchors, host fields and single pulsators;
    /// each row's `section` says which).
    pub nodes: Vec<DistanceRow>,
    /// The names of the single pulsators among `nodes` (section
    /// `pulsators`): neither anchors nor a supernova's host.
    pub pulsators: Vec<String>,
    /// Every supernova's standardized-candle distance.
    pub supernovae: Vec<DistanceRow>,
    /// Each calibrator's host distance and the peak absolute magnitude it
    /// calibrates.
    pub calibrators: Vec<CalibratorRow>,
    /// The solved parameters.
    pub parameters: Vec<ParamRow>,
    /// Links left open.
    pub open: Vec<OpenRow>,
    /// The targets on the ladder.
    pub members: Vec<Member>,
    /// The observations of the chain.
    pub observations: Vec<Observation>,
    /// Hours planned per rung (the host rung without the single pulsators,
    /// which have their own line: `pulsator_hours`).
    pub hours_by_rung: Vec<RungHours>,
    /// Hours planned on the single pulsators (section `pulsators`): they keep
    /// the host rung in the chain's observations but calibrate nothing, so
    /// the hours line gives them their own row.
    pub pulsator_hours: f64,
    /// Steps ranked by the fall of the end point's σ_d/d per hour, best first.
    pub next: Vec<Ranked>,
    /// What one more hour on each target of the ladder buys at the end
    /// point (its method's one more visit), in the order of `members`, then
    /// one line per field (one more visit of it: every star it measures).
    pub marginal: Vec<Marginal>,
    /// The best step of each rung that helps the end point, in ladder
    /// order: where the next hour on each rung is best spent.
    pub best_by_rung: Vec<Ranked>,
    /// Targets left off the ladder, with the reason.
    pub left_out: Vec<(String, String)>,
    /// Warnings.
    pub notes: Vec<String>,
}

/// The end point chosen when none is asked for.
fn default_end_point(l: &Ladder, sol: &super::model::Solution) -> Option<EndPoint> {
    if sol.index(&Param::Hubble).is_some() {
        return Some(EndPoint::Hubble);
    }
    let closed = |n: &str| {
        sol.index(&Param::Modulus {
            node: n.to_string(),
        })
        .is_some()
    };
    l.members
        .iter()
        .filter(|m| m.role == super::build::Role::Calibrator)
        .chain(l.members.iter())
        .filter_map(|m| m.node.as_deref())
        .find(|n| closed(n))
        .map(|n| EndPoint::Node {
            node: n.to_string(),
        })
}

/// Build, solve and report the ladder of a programme for an end point
/// (`None`: the default, see [`LadderReport::end_point`]).
pub fn report(
    settings: &Settings,
    targets: &[Target],
    file: Option<&Path>,
    end_point: Option<EndPoint>,
) -> Result<LadderReport> {
    let l = build(settings, targets, file)?;
    report_of(l, end_point)
}

/// [`report`] from a built ladder.
pub fn report_of(l: Ladder, end_point: Option<EndPoint>) -> Result<LadderReport> {
    let sol = l.chain.solve()?;
    let ep = match end_point {
        Some(e) => e,
        None => match default_end_point(&l, &sol) {
            Some(e) => e,
            None => {
                // Nothing closes: say what is open, from the bottom.
                let mut why = sol
                    .open
                    .iter()
                    .min_by(|a, b| a.0.cmp(&b.0))
                    .map(|(_, w)| w.clone())
                    .unwrap_or_else(|| {
                        "the programme has no anchor: give a pulsator its parallax_mas".into()
                    });
                // What was left off the ladder may be why.
                for (t, w) in l.left_out.iter().take(3) {
                    why.push_str(&format!("; {t} left out: {w}"));
                }
                return Err(super::model::ChainError::NotClosed(why).into());
            }
        },
    };
    let b = l.chain.budget(&sol, &ep)?;
    let (h0, h0_pct) = match ep {
        EndPoint::Hubble => (Some(h0_from_intercept(b.value_mag)), Some(b.distance_pct)),
        _ => match sol.get(&Param::Hubble) {
            Some((h, s)) => (
                Some(h0_from_intercept(h)),
                Some(100.0 * DIST_FRAC_PER_MAG * s),
            ),
            None => (None, None),
        },
    };
    let mut nodes = Vec::new();
    for p in &sol.params {
        if let Param::Modulus { node } = p {
            let e = EndPoint::Node { node: node.clone() };
            let nb = l.chain.budget(&sol, &e)?;
            let rung = if l
                .chain
                .observations
                .iter()
                .any(|o| o.node.as_deref() == Some(node.as_str()) && o.rung == Rung::Anchor)
            {
                Rung::Anchor
            } else {
                Rung::Host
            };
            let section = if rung == Rung::Anchor {
                Section::Anchors
            } else if l.members.iter().any(|m| {
                m.node.as_deref() == Some(node.as_str())
                    && (m.role == Role::Calibrator || m.target != *node)
            }) {
                // A field (its stars' node is not one of them), or a host
                // a supernova names.
                Section::HostFields
            } else {
                Section::Pulsators
            };
            nodes.push(DistanceRow::from_budget(node, rung, section, &nb));
        }
    }
    let mut supernovae = Vec::new();
    for m in &l.members {
        if matches!(
            m.role,
            super::build::Role::Calibrator | super::build::Role::HubbleFlow
        ) {
            let e = EndPoint::Supernova {
                target: m.target.clone(),
            };
            if let Ok(sb) = l.chain.budget(&sol, &e) {
                let (rung, section) = if m.role == super::build::Role::Calibrator {
                    (Rung::Calibrator, Section::Calibrators)
                } else {
                    (Rung::HubbleFlow, Section::HubbleFlow)
                };
                supernovae.push(DistanceRow::from_budget(&m.target, rung, section, &sb));
            }
        }
    }
    let parameters = sol
        .params
        .iter()
        .enumerate()
        .map(|(i, p)| ParamRow {
            param: p.clone(),
            text: p.text(),
            value_mag: sol.estimate_mag[i],
            sigma_mag: sol.covariance[i][i].max(0.0).sqrt(),
        })
        .collect();
    let open = sol
        .open
        .iter()
        .map(|(p, w)| OpenRow {
            param: p.clone(),
            why: w.clone(),
        })
        .collect();
    let singles: Vec<String> = nodes
        .iter()
        .filter(|n| n.section == Section::Pulsators)
        .map(|n| n.name.clone())
        .collect();
    let single = |o: &Observation| {
        o.rung == Rung::Host && o.node.as_ref().is_some_and(|n| singles.contains(n))
    };
    let pulsator_hours: f64 = l
        .chain
        .observations
        .iter()
        .filter(|o| single(o))
        .map(|o| o.hours)
        .sum();
    let mut hours_by_rung = Vec::new();
    for r in Rung::ALL {
        let h: f64 = l
            .chain
            .observations
            .iter()
            .filter(|o| o.rung == r && !single(o))
            .map(|o| o.hours)
            .sum();
        if h > 0.0 {
            hours_by_rung.push(RungHours { rung: r, hours: h });
        }
    }
    let calibrators = calibrators_of(&l);
    let h0_basis = h0_basis_text(&calibrators, l.flow_measured.len(), l.h0_ref_km_s_mpc);
    let ranked = rank(&l.chain, &ep, l.steps.clone())?;
    let marginal = marginal_of(&l.members, &ranked);
    let next: Vec<Ranked> = ranked
        .into_iter()
        .filter(|r| r.gain_pct_per_hour > 0.0)
        .collect();
    let best_by_rung = Rung::ALL
        .iter()
        .filter_map(|g| next.iter().find(|r| r.step.rung == *g).cloned())
        .collect();
    Ok(LadderReport {
        end_point_text: ep.text(),
        end_point: b,
        h0_km_s_mpc: h0,
        h0_sigma_pct: h0_pct,
        h0_ref_km_s_mpc: l.h0_ref_km_s_mpc,
        h0_basis,
        pulsators: singles,
        nodes,
        supernovae,
        calibrators,
        parameters,
        open,
        members: l.members,
        observations: l.chain.observations,
        hours_by_rung,
        pulsator_hours,
        next,
        marginal,
        best_by_rung,
        left_out: l.left_out,
        notes: l.notes,
    })
}

/// What H0 rests on, in words ([`LadderReport::h0_basis`]): the
/// calibrators measured from their given peaks or forecast, and the
/// `flow` Hubble-flow supernovae measured from theirs.
pub fn h0_basis_text(calibrators: &[CalibratorRow], flow: usize, h0_ref_km_s_mpc: f64) -> String {
    let measured = calibrators.iter().filter(|c| c.observed).count();
    let forecast = calibrators
        .iter()
        .filter(|c| !c.observed && c.standardized_peak.is_some())
        .count();
    match (measured, forecast, flow) {
        (0, 0, 0) => format!("planned values on the H0 = {h0_ref_km_s_mpc} scale"),
        (m, f, k) => {
            // "1 calibrator measured from its given peak", "2 ... their
            // given peaks".
            let measured = |n: usize, one: &str, many: &str| {
                if n == 1 {
                    format!("1 {one} measured from its given peak")
                } else {
                    format!("{n} {many} measured from their given peaks")
                }
            };
            let mut parts = Vec::new();
            if m > 0 {
                parts.push(measured(m, "calibrator", "calibrators"));
            }
            if f > 0 {
                parts.push(format!("{f} from a forecast peak",));
            }
            if k > 0 {
                parts.push(measured(
                    k,
                    "Hubble-flow supernova",
                    "Hubble-flow supernovae",
                ));
            }
            format!(
                "{}; the rest planned on the H0 = {h0_ref_km_s_mpc} scale",
                parts.join(", ")
            )
        }
    }
}

/// Each member's best one-more-visit step (a step that sharpens one of its
/// own observations), from the ranked steps.
fn marginal_of(members: &[Member], ranked: &[Ranked]) -> Vec<Marginal> {
    // A field's own line: one more visit of it (every star it measures).
    let fields = ranked
        .iter()
        .filter(|r| matches!(r.step.change, Change::SharperMany { .. }))
        .map(|r| Marginal {
            target: r.step.target.clone(),
            role: if r.step.rung == Rung::Anchor {
                Role::Anchor
            } else {
                Role::HostStar
            },
            node: Some(r.step.target.clone()),
            step: Some(r.step.label.clone()),
            hours: Some(r.step.hours),
            gain_pct_per_hour: Some(r.gain_pct_per_hour.max(0.0)),
            why: None,
        })
        .collect::<Vec<_>>();
    let mut out: Vec<Marginal> = members
        .iter()
        .map(|m| {
            let best = ranked
                .iter()
                .filter(|r| {
                    r.step.target == m.target && matches!(r.step.change, Change::Sharper { .. })
                })
                .max_by(|a, b| a.gain_pct_per_hour.total_cmp(&b.gain_pct_per_hour));
            let why = best.is_none().then(|| {
                if m.hours <= 0.0 {
                    "measured already (given in the targets file): no visit is planned".to_string()
                } else if m.role == Role::HostStar && m.node.as_deref() != Some(m.target.as_str()) {
                    "a star of a field: the field's visits serve all its stars (see one more visit of its field, and a new star in it)".to_string()
                } else {
                    "its method offers no further visit that sharpens it".to_string()
                }
            });
            Marginal {
                target: m.target.clone(),
                role: m.role,
                node: m.node.clone(),
                step: best.map(|r| r.step.label.clone()),
                hours: best.map(|r| r.step.hours),
                gain_pct_per_hour: best.map(|r| r.gain_pct_per_hour.max(0.0)),
                why,
            }
        })
        .collect();
    out.extend(fields);
    out
}

impl LadderReport {
    /// A target's role in words where the report lists it: a single
    /// pulsator (its node among `pulsators`) is a `pulsator`, not a host star.
    pub fn role_text(&self, m: &Marginal) -> &'static str {
        match (&m.role, &m.node) {
            (Role::HostStar, Some(n)) if self.pulsators.contains(n) => "pulsator",
            (r, _) => r.text(),
        }
    }
    /// Every distance of the chain (nodes, then supernovae) in ladder order:
    /// by section, each section in the report's order (what `rung ladder`
    /// and the Ladder view list).
    pub fn chain_in_order(&self) -> Vec<&DistanceRow> {
        let mut v: Vec<&DistanceRow> = self.nodes.iter().chain(&self.supernovae).collect();
        v.sort_by_key(|d| d.section);
        v
    }

    /// The best gain per hour (percentage points of the end point's σ_d/d)
    /// of one more visit on the targets of a chain row: the supernova
    /// itself, or the pulsators of a node. `None` when none offers a step.
    pub fn marginal_of_row(&self, name: &str) -> Option<f64> {
        self.marginal
            .iter()
            .filter(|m| {
                m.target == name
                    || (m.node.as_deref() == Some(name)
                        && matches!(m.role, Role::Anchor | Role::HostStar))
            })
            .filter_map(|m| m.gain_pct_per_hour)
            .max_by(f64::total_cmp)
    }
}
