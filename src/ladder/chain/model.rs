//! The whole distance ladder as one linear model, solved by generalised
//! least squares (docs/science.md, The ladder).
//!
//! Parameters ([`Param`]): the zero point of each period–luminosity relation,
//! a correction to each relation's slope (held by a prior from the relation's
//! published slope error), the distance modulus of each node (an anchor star
//! or cluster, a host field), the peak absolute magnitude of each supernova
//! standardization, and the Hubble-flow intercept h = 5 log10 H0.
//!
//! Observations ([`Observation`]): each is a value in magnitudes, a known
//! offset, and a row of coefficients, `value − offset = Σ coeff · param`,
//! with independent error terms that add in quadrature:
//!
//! | observation | row | rung |
//! | --- | --- | --- |
//! | a parallax (as a modulus, 10 − 5 log10 ϖ_mas) | μ[node] | anchors |
//! | an anchor pulsator's mean magnitude less extinction, offset a(log P − 1) | μ[node] + zp[r] + (log P − 1) δa[r] | anchors |
//! | a host pulsator, the same | μ[field] + zp[r] + (log P − 1) δa[r] | host fields |
//! | a calibrator's standardized peak | μ[host] + M[s] | calibrators |
//! | a Hubble-flow supernova's standardized peak, offset 5 log10(c d̂(z)) + 25 | M[s] − h | Hubble flow |
//! | a relation's published slope | δa[r] (value 0, σ = the slope's error) | relations |
//! | a relation's published metallicity term | δγ[r] (value 0, σ = its error) | relations |
//! | a node's metallicity | δZ[node] (value 0, σ = σ[Fe/H]) | the node's |
//!
//! A pulsator's row also carries γ δZ[node] + ([Fe/H] − [Fe/H]_ref) δγ[r]
//! when its relation has a metallicity term: the stars of a node share one
//! metallicity, so its error does not average down over them.
//!
//! d̂(z) = H0 d_L(z) / c is the luminosity distance in units of the Hubble
//! distance, which depends on the redshift and Ωm only; with d_L in Mpc and c
//! in km/s, m = M + 5 log10(c d̂) + 25 − 5 log10 H0.
//!
//! The solution is θ̂ = (AᵀWA)⁻¹AᵀW y with W the inverse variances, its
//! covariance (AᵀWA)⁻¹, and the gain G = (AᵀWA)⁻¹AᵀW, which says how much
//! each observation moves each parameter. Any end point that is linear in the
//! parameters and the observations, q = k + s·y + c·θ̂, is q = k + w·y with
//! w = s + Gᵀc; its variance is Σ_j w_j² σ_j² exactly, and each observation's
//! terms contribute w_j² σ_jk²: the error budget by rung and by term.

use crate::linalg::{LinalgError, spd_inverse};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// Speed of light, km/s (exact, SI definition).
pub const C_KM_S: f64 = 299_792.458;

/// Magnitudes of distance modulus per unit of ln: 5 / ln 10 ≈ 2.1715.
pub const MAG_PER_LN: f64 = 5.0 / std::f64::consts::LN_10;

/// The rungs of the ladder, from the ground up.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Rung {
    /// Nodes with a geometric distance (parallaxes) and their pulsators.
    Anchor,
    /// Pulsators in the host fields of supernovae.
    Host,
    /// Supernovae in hosts with a distance: they calibrate the peak.
    Calibrator,
    /// Supernovae far enough that the redshift gives the distance.
    HubbleFlow,
    /// Published coefficients held as priors (a relation's slope).
    Relation,
}

impl Rung {
    /// Every rung, in ladder order.
    pub const ALL: [Rung; 5] = [
        Rung::Anchor,
        Rung::Host,
        Rung::Calibrator,
        Rung::HubbleFlow,
        Rung::Relation,
    ];
    /// The machine label (JSON).
    pub fn label(self) -> &'static str {
        match self {
            Rung::Anchor => "anchor",
            Rung::Host => "host",
            Rung::Calibrator => "calibrator",
            Rung::HubbleFlow => "hubble_flow",
            Rung::Relation => "relation",
        }
    }
    /// The rung in words, for tables and views.
    pub fn text(self) -> &'static str {
        match self {
            Rung::Anchor => "anchors",
            Rung::Host => "host fields",
            Rung::Calibrator => "calibrators",
            Rung::HubbleFlow => "Hubble flow",
            Rung::Relation => "relation priors",
        }
    }
}

/// A parameter of the ladder.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(tag = "param", rename_all = "snake_case")]
pub enum Param {
    /// Absolute magnitude of a period–luminosity relation at log10 P = 1, mag.
    ZeroPoint {
        /// The relation's name.
        relation: String,
    },
    /// Correction to a relation's published slope, mag per dex.
    Slope {
        /// The relation's name.
        relation: String,
    },
    /// Correction to a relation's published metallicity term γ, mag per dex.
    FehCoeff {
        /// The relation's name.
        relation: String,
    },
    /// Distance modulus of a node (an anchor or a host field), mag.
    Modulus {
        /// The node's name (a field, or a target standing alone).
        node: String,
    },
    /// Error of a node's metallicity [Fe/H], dex (shared by its stars).
    Metallicity {
        /// The node's name.
        node: String,
    },
    /// Fractional error of a field's extinction (one reddening for the
    /// field, shared by its stars): each star's modulus moves by A_i times it.
    Extinction {
        /// The node's name.
        node: String,
    },
    /// Peak absolute magnitude of standardized supernovae, mag.
    PeakMag {
        /// The standardization's name.
        standardization: String,
    },
    /// The Hubble-flow intercept h = 5 log10 H0 (H0 in km/s/Mpc), mag.
    Hubble,
}

impl Param {
    /// The parameter in words: "zero point of V", "μ of LPO-F1", "M of
    /// stretch–colour", "5 log10 H0".
    pub fn text(&self) -> String {
        match self {
            Param::ZeroPoint { relation } => format!("zero point of {relation}"),
            Param::Slope { relation } => format!("slope of {relation}"),
            Param::FehCoeff { relation } => format!("metallicity term of {relation}"),
            Param::Metallicity { node } => format!("[Fe/H] of {node}"),
            Param::Extinction { node } => format!("extinction scale of {node}"),
            Param::Modulus { node } => format!("μ of {node}"),
            Param::PeakMag { standardization } => format!("peak M of {standardization}"),
            Param::Hubble => "5 log10 H0".into(),
        }
    }

    /// Why the parameter is not fixed by the programme (the chain is open there).
    fn open_why(&self) -> String {
        match self {
            Param::ZeroPoint { relation } => format!(
                "relation {relation} has no anchor (no pulsator using it sits in a field or on a star with a parallax)"
            ),
            Param::Slope { relation } => format!("relation {relation} has no slope prior"),
            Param::FehCoeff { relation } => {
                format!("relation {relation} has no prior on its metallicity term")
            }
            Param::Metallicity { node } => format!("{node} has no metallicity prior"),
            Param::Extinction { node } => format!("{node} has no extinction prior"),
            Param::Modulus { node } => format!(
                "{node} has no distance (no parallax, and none of its pulsators uses an anchored relation)"
            ),
            Param::PeakMag { standardization } => format!(
                "the {standardization} standardization has no calibrator (no supernova of it in a host with a distance)"
            ),
            Param::Hubble => {
                "the Hubble flow has no supernova with a calibrated peak (give a supernova a redshift in the flow and no host)"
                    .into()
            }
        }
    }
}

/// One independent error term of an observation, magnitudes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Term {
    /// What it is ("parallax", "mean magnitude", "relation scatter", ...).
    pub name: String,
    /// Its σ, mag.
    pub sigma_mag: f64,
}

impl Term {
    /// A term from its name and σ in mag.
    pub fn new(name: impl Into<String>, sigma_mag: f64) -> Term {
        Term {
            name: name.into(),
            sigma_mag,
        }
    }
}

/// One observation of the ladder: `value_mag − offset_mag = Σ coeff · param`,
/// with independent error terms.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Observation {
    /// The target it comes from (a relation's name for a prior).
    pub target: String,
    /// The node it measures, if any (its field or host; the target itself
    /// for a star standing alone).
    pub node: Option<String>,
    /// Its rung.
    pub rung: Rung,
    /// What was measured, in words ("parallax", "mean magnitude", "standardized peak").
    pub what: String,
    /// The measured (or planned) value, mag.
    pub value_mag: f64,
    /// The known part subtracted before the row applies, mag.
    pub offset_mag: f64,
    /// The row: coefficient of each parameter.
    pub coeffs: Vec<(Param, f64)>,
    /// Independent error terms, adding in quadrature.
    pub terms: Vec<Term>,
    /// Telescope hours the observation takes as planned (0 when given).
    pub hours: f64,
}

impl Observation {
    /// σ of the observation, mag: the quadrature sum of its terms.
    pub fn sigma_mag(&self) -> f64 {
        self.terms
            .iter()
            .map(|t| t.sigma_mag * t.sigma_mag)
            .sum::<f64>()
            .sqrt()
    }
}

/// Why the ladder cannot give an answer.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ChainError {
    /// An end point needs a parameter no observation fixes.
    #[error("the chain is not closed: {0}")]
    NotClosed(String),
    /// The normal matrix is singular though every parameter is reached.
    #[error("the chain cannot be solved: {0}")]
    Singular(String),
    /// An observation that cannot enter the fit.
    #[error("observation '{what}' of {target}: {why}")]
    BadObservation {
        /// Its target.
        target: String,
        /// What it measures.
        what: String,
        /// What is wrong.
        why: String,
    },
    /// An end point the ladder does not have.
    #[error("no end point {0}")]
    UnknownEndPoint(String),
}

/// The observations of a ladder.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Chain {
    /// Every observation, in the order given.
    pub observations: Vec<Observation>,
}

/// The least-squares solution of a [`Chain`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Solution {
    /// The parameters the observations fix, in order.
    pub params: Vec<Param>,
    /// Their estimates, mag.
    pub estimate_mag: Vec<f64>,
    /// Their covariance (AᵀWA)⁻¹, mag².
    pub covariance: Vec<Vec<f64>>,
    /// The gain G = (AᵀWA)⁻¹AᵀW: row per parameter, column per observation
    /// of the chain (zero for an observation left out).
    pub gain: Vec<Vec<f64>>,
    /// Parameters no observation fixes, with the reason.
    pub open: Vec<(Param, String)>,
    /// Observations left out (their row reaches an open parameter), by
    /// index, with the reason.
    pub left_out: Vec<(usize, String)>,
}

impl Solution {
    /// Index of a parameter among the solved ones.
    pub fn index(&self, p: &Param) -> Option<usize> {
        self.params.iter().position(|q| q == p)
    }
    /// Estimate and σ of a parameter, mag.
    pub fn get(&self, p: &Param) -> Option<(f64, f64)> {
        let i = self.index(p)?;
        Some((self.estimate_mag[i], self.covariance[i][i].max(0.0).sqrt()))
    }
    /// Why a parameter is open, if it is.
    pub fn open_why(&self, p: &Param) -> Option<&str> {
        self.open
            .iter()
            .find(|(q, _)| q == p)
            .map(|(_, w)| w.as_str())
    }
}

impl Chain {
    /// A chain of observations.
    pub fn new(observations: Vec<Observation>) -> Chain {
        Chain { observations }
    }

    /// Every parameter some observation names, in order.
    pub fn all_params(&self) -> Vec<Param> {
        let set: BTreeSet<Param> = self
            .observations
            .iter()
            .flat_map(|o| o.coeffs.iter().map(|(p, _)| p.clone()))
            .collect();
        set.into_iter().collect()
    }

    /// Check each observation: finite value and offset, finite non-zero
    /// coefficients, and finite terms whose total is positive.
    pub fn check(&self) -> Result<(), ChainError> {
        for o in &self.observations {
            let bad = |why: &str| ChainError::BadObservation {
                target: o.target.clone(),
                what: o.what.clone(),
                why: why.to_string(),
            };
            if !o.value_mag.is_finite() || !o.offset_mag.is_finite() {
                return Err(bad("its value is not a finite number"));
            }
            if o.coeffs.is_empty() || o.coeffs.iter().any(|(_, c)| !c.is_finite() || *c == 0.0) {
                return Err(bad(
                    "its row has no parameter or a coefficient that is not finite",
                ));
            }
            if o.terms
                .iter()
                .any(|t| !t.sigma_mag.is_finite() || t.sigma_mag < 0.0)
            {
                return Err(bad("an error term is not a finite, non-negative number"));
            }
            if o.sigma_mag() <= 0.0 {
                return Err(bad(
                    "its uncertainty is zero: a perfect measurement would fix the ladder by itself",
                ));
            }
            if !o.hours.is_finite() || o.hours < 0.0 {
                return Err(bad("its hours are not a finite, non-negative number"));
            }
        }
        Ok(())
    }

    /// Which parameters the observations fix: starting from none, an
    /// observation whose row has one parameter not yet fixed fixes it; repeat
    /// until nothing changes. (Each row here has at most three parameters,
    /// and a parameter reached this way is determined; the Cholesky
    /// factorization confirms it.)
    pub fn closed_params(&self) -> BTreeSet<Param> {
        let mut closed: BTreeSet<Param> = BTreeSet::new();
        loop {
            let before = closed.len();
            for o in &self.observations {
                let open: Vec<&Param> = o
                    .coeffs
                    .iter()
                    .map(|(p, _)| p)
                    .filter(|p| !closed.contains(*p))
                    .collect();
                if open.len() == 1 {
                    closed.insert(open[0].clone());
                }
            }
            if closed.len() == before {
                return closed;
            }
        }
    }

    /// Solve the chain by weighted least squares (normal equations,
    /// Cholesky). Parameters no observation fixes are left open with the
    /// reason, and observations that reach them are left out.
    #[allow(clippy::needless_range_loop)] // index loops mirror the matrix algebra
    pub fn solve(&self) -> Result<Solution, ChainError> {
        self.check()?;
        let closed = self.closed_params();
        let params: Vec<Param> = closed.iter().cloned().collect();
        let index: BTreeMap<&Param, usize> =
            params.iter().enumerate().map(|(i, p)| (p, i)).collect();
        let open: Vec<(Param, String)> = self
            .all_params()
            .into_iter()
            .filter(|p| !closed.contains(p))
            .map(|p| {
                let why = p.open_why();
                (p, why)
            })
            .collect();
        let mut left_out = Vec::new();
        let mut used = Vec::new();
        for (j, o) in self.observations.iter().enumerate() {
            match o.coeffs.iter().find(|(p, _)| !closed.contains(p)) {
                Some((p, _)) => left_out.push((j, p.open_why())),
                None => used.push(j),
            }
        }
        let np = params.len();
        let n = self.observations.len();
        if np == 0 {
            return Ok(Solution {
                params,
                estimate_mag: vec![],
                covariance: vec![],
                gain: vec![],
                open,
                left_out,
            });
        }
        let mut normal = vec![vec![0.0; np]; np];
        let mut rhs = vec![0.0; np];
        for &j in &used {
            let o = &self.observations[j];
            let w = 1.0 / (o.sigma_mag() * o.sigma_mag());
            let y = o.value_mag - o.offset_mag;
            for (p, c) in &o.coeffs {
                let a = index[p];
                rhs[a] += w * c * y;
                for (q, d) in &o.coeffs {
                    normal[a][index[q]] += w * c * d;
                }
            }
        }
        let cov = spd_inverse(&normal).map_err(|e| match e {
            LinalgError::Singular { row, .. } => ChainError::Singular(format!(
                "{} is not fixed independently of the others (the observations leave a combination of parameters free)",
                params[row].text()
            )),
            LinalgError::Shape(s) => ChainError::Singular(s),
        })?;
        let estimate: Vec<f64> = (0..np)
            .map(|a| (0..np).map(|b| cov[a][b] * rhs[b]).sum())
            .collect();
        let mut gain = vec![vec![0.0; n]; np];
        for &j in &used {
            let o = &self.observations[j];
            let w = 1.0 / (o.sigma_mag() * o.sigma_mag());
            for a in 0..np {
                gain[a][j] = w * o
                    .coeffs
                    .iter()
                    .map(|(p, c)| cov[a][index[p]] * c)
                    .sum::<f64>();
            }
        }
        Ok(Solution {
            params,
            estimate_mag: estimate,
            covariance: cov,
            gain,
            open,
            left_out,
        })
    }
}

/// What the ladder is asked to deliver.
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize)]
#[serde(tag = "end_point", rename_all = "snake_case")]
pub enum EndPoint {
    /// The programme's Hubble-constant-like combination h = 5 log10 H0.
    Hubble,
    /// The distance modulus of a node (a host field or an anchor).
    Node {
        /// The node's name.
        node: String,
    },
    /// A supernova's standardized-candle distance modulus, m_std − M̂.
    Supernova {
        /// The target's name.
        target: String,
    },
}

impl EndPoint {
    /// The end point in words.
    pub fn text(&self) -> String {
        match self {
            EndPoint::Hubble => "H0 (the Hubble-flow intercept)".into(),
            EndPoint::Node { node } => format!("distance of {node}"),
            EndPoint::Supernova { target } => format!("distance of {target}"),
        }
    }
}

/// One error term's share of an end point's variance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Share {
    /// The rung it comes from.
    pub rung: Rung,
    /// The term's name.
    pub term: String,
    /// Its contribution to the end point's σ in quadrature, mag
    /// (the square root of its variance share).
    pub sigma_mag: f64,
    /// The same as σ_d/d, percent.
    pub distance_pct: f64,
    /// Its fraction of the end point's variance (the fractions add to 1).
    pub variance_fraction: f64,
}

/// An end point's value, σ and error budget.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Budget {
    /// The end point.
    pub end_point: EndPoint,
    /// Its value, mag (a distance modulus, or 5 log10 H0).
    pub value_mag: f64,
    /// Its σ, mag.
    pub sigma_mag: f64,
    /// σ_d/d (or σ_H0/H0), percent: 100 (ln 10 / 5) σ.
    pub distance_pct: f64,
    /// The part from the end point's own observations, mag.
    pub own_sigma_mag: f64,
    /// The part shared with every distance calibrated the same way (the
    /// rungs below), mag. own² + shared² = σ².
    pub shared_sigma_mag: f64,
    /// The variance by rung, in ladder order (rungs that contribute).
    pub by_rung: Vec<Share>,
    /// The variance by rung and term, largest first.
    pub by_term: Vec<Share>,
    /// The weight of each observation of the chain in the end point
    /// (w = s + Gᵀc), in chain order.
    pub weights: Vec<f64>,
}

fn share(rung: Rung, term: &str, var: f64, total: f64) -> Share {
    let s = var.max(0.0).sqrt();
    Share {
        rung,
        term: term.to_string(),
        sigma_mag: s,
        distance_pct: 100.0 * crate::ladder::DIST_FRAC_PER_MAG * s,
        variance_fraction: if total > 0.0 { var / total } else { 0.0 },
    }
}

impl Chain {
    /// The end point as q = k + s·y + c·θ: the observation weights `s`, the
    /// parameter coefficients `c`, and the observations counted as its own.
    #[allow(clippy::type_complexity)]
    fn end_point_form(
        &self,
        sol: &Solution,
        ep: &EndPoint,
    ) -> Result<(Vec<f64>, Vec<(Param, f64)>, Vec<bool>), ChainError> {
        let n = self.observations.len();
        let need = |p: &Param| -> Result<(), ChainError> {
            if sol.index(p).is_some() {
                Ok(())
            } else {
                Err(ChainError::NotClosed(self.why_open(sol, p)))
            }
        };
        match ep {
            EndPoint::Hubble => {
                need(&Param::Hubble)?;
                let own = self
                    .observations
                    .iter()
                    .map(|o| o.rung == Rung::HubbleFlow)
                    .collect();
                Ok((vec![0.0; n], vec![(Param::Hubble, 1.0)], own))
            }
            EndPoint::Node { node } => {
                let p = Param::Modulus { node: node.clone() };
                if !self.all_params().contains(&p) {
                    return Err(ChainError::UnknownEndPoint(format!(
                        "'{node}': no field or anchor of that name"
                    )));
                }
                need(&p)?;
                let own = self
                    .observations
                    .iter()
                    .map(|o| o.node.as_deref() == Some(node.as_str()))
                    .collect();
                Ok((vec![0.0; n], vec![(p, 1.0)], own))
            }
            EndPoint::Supernova { target } => {
                let j = self
                    .observations
                    .iter()
                    .position(|o| {
                        &o.target == target
                            && o.coeffs
                                .iter()
                                .any(|(p, _)| matches!(p, Param::PeakMag { .. }))
                    })
                    .ok_or_else(|| {
                        ChainError::UnknownEndPoint(format!(
                            "'{target}': no supernova of that name in the ladder"
                        ))
                    })?;
                let m = self.observations[j]
                    .coeffs
                    .iter()
                    .find(|(p, _)| matches!(p, Param::PeakMag { .. }))
                    .map(|(p, _)| p.clone())
                    .ok_or_else(|| ChainError::UnknownEndPoint(target.clone()))?;
                need(&m)?;
                let mut s = vec![0.0; n];
                s[j] = 1.0;
                let own = (0..n).map(|i| i == j).collect();
                Ok((s, vec![(m, -1.0)], own))
            }
        }
    }

    /// Why an open parameter is open, from the lowest open rung it waits on
    /// up to itself: "relation V has no anchor (…); so LPO-F1 has no
    /// distance (…); so …".
    pub fn why_open(&self, sol: &Solution, p: &Param) -> String {
        let is_open = |q: &Param| sol.index(q).is_none();
        let mut path = vec![p.clone()];
        let mut cur = p.clone();
        // Follow the lowest open parameter that shares a row with the current one.
        while let Some(next) = self
            .observations
            .iter()
            .filter(|o| o.coeffs.iter().any(|(q, _)| *q == cur))
            .flat_map(|o| o.coeffs.iter().map(|(q, _)| q))
            .filter(|q| is_open(q) && !path.contains(q))
            .min()
            .cloned()
        {
            path.push(next.clone());
            cur = next;
        }
        path.iter()
            .rev()
            .map(|q| q.open_why())
            .collect::<Vec<_>>()
            .join("; so ")
    }

    /// The value, σ and error budget of an end point from a solution of this chain.
    pub fn budget(&self, sol: &Solution, ep: &EndPoint) -> Result<Budget, ChainError> {
        let (s, c, own) = self.end_point_form(sol, ep)?;
        let mut w = s.clone();
        let mut value = 0.0;
        for (p, cp) in &c {
            let a = sol
                .index(p)
                .ok_or_else(|| ChainError::NotClosed(p.open_why()))?;
            value += cp * sol.estimate_mag[a];
            for (wj, gj) in w.iter_mut().zip(&sol.gain[a]) {
                *wj += cp * gj;
            }
        }
        for (sj, o) in s.iter().zip(&self.observations) {
            if *sj != 0.0 {
                value += sj * o.value_mag;
            }
        }
        let mut total = 0.0;
        let mut own_var = 0.0;
        let mut rung_var: BTreeMap<Rung, f64> = BTreeMap::new();
        let mut term_var: BTreeMap<(Rung, String), f64> = BTreeMap::new();
        for (j, o) in self.observations.iter().enumerate() {
            if w[j] == 0.0 {
                continue;
            }
            for t in &o.terms {
                let v = w[j] * w[j] * t.sigma_mag * t.sigma_mag;
                total += v;
                if own[j] {
                    own_var += v;
                }
                *rung_var.entry(o.rung).or_default() += v;
                *term_var.entry((o.rung, t.name.clone())).or_default() += v;
            }
        }
        let by_rung = rung_var
            .iter()
            .map(|(r, v)| share(*r, r.text(), *v, total))
            .collect();
        let mut by_term: Vec<Share> = term_var
            .iter()
            .map(|((r, t), v)| share(*r, t, *v, total))
            .collect();
        by_term.sort_by(|a, b| b.sigma_mag.total_cmp(&a.sigma_mag));
        let sigma = total.sqrt();
        Ok(Budget {
            end_point: ep.clone(),
            value_mag: value,
            sigma_mag: sigma,
            distance_pct: 100.0 * crate::ladder::DIST_FRAC_PER_MAG * sigma,
            own_sigma_mag: own_var.sqrt(),
            shared_sigma_mag: (total - own_var).max(0.0).sqrt(),
            by_rung,
            by_term,
            weights: w,
        })
    }

    /// Solve and budget one end point.
    pub fn end_point(&self, ep: &EndPoint) -> Result<Budget, ChainError> {
        let sol = self.solve()?;
        self.budget(&sol, ep)
    }
}

/// H0 in km/s/Mpc from the intercept h = 5 log10 H0.
pub fn h0_from_intercept(h_mag: f64) -> f64 {
    10f64.powf(h_mag / 5.0)
}

/// The distance modulus of a parallax, 10 − 5 log10 ϖ_mas (m − M = 5 log10
/// (d / 10 pc) with d = 1000/ϖ_mas pc), and its first-order σ, (5/ln 10)
/// σϖ/ϖ. Valid while σϖ/ϖ is small: beyond about 10 % the inverse
/// parallax is a biased distance (Lutz & Kelker 1973, PASP 85, 573), see
/// [`parallax_modulus_bias_mag`].
pub fn parallax_modulus(parallax_mas: f64, sigma_mas: f64) -> (f64, f64) {
    (
        10.0 - 5.0 * parallax_mas.log10(),
        MAG_PER_LN * sigma_mas / parallax_mas,
    )
}

/// The second-order bias of the modulus from a parallax with fractional
/// error f = σϖ/ϖ: E[−5 log10 ϖ̂] ≈ −5 log10 ϖ + (5 / (2 ln 10)) f² (the
/// Taylor expansion of the logarithm, for a Gaussian parallax error).
/// 0.011 mag at f = 0.1. This is the transform's own bias, apart from the
/// Lutz–Kelker bias, which depends on how the sample was selected and on
/// the population's distribution and is not computed here.
pub fn parallax_modulus_bias_mag(frac: f64) -> f64 {
    0.5 * MAG_PER_LN * frac * frac
}
