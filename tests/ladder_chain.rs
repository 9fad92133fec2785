//! The ladder's linear model (src/ladder/chain/model.rs) against independent
//! computations:
//!
//! - a closed-form sequential propagation on chains shaped like a tree (one
//!   relation, anchors, host fields, calibrators, Hubble flow), where the
//!   generalised least-squares answer must equal the step-by-step weighted
//!   means with each step's σ added in quadrature (the textbook propagation
//!   of errors; common practice);
//! - a Monte Carlo over random chains: noise drawn term by term from a
//!   fixed-seed generator (SplitMix64, Steele, Lea & Flood 2014; Box–Muller,
//!   Box & Muller 1958), the chain re-solved, the scatter of each end point
//!   and of each rung's part compared with the stated σ and budget;
//! - a property test: adding an observation never makes an end point's σ larger.

#![allow(clippy::needless_range_loop, clippy::type_complexity)]

mod rng_support;

use proptest::prelude::*;
use rng_support::Rng;
use rung::ladder::chain::{
    Chain, ChainError, EndPoint, Observation, Param, Rung, Term, h0_from_intercept,
    parallax_modulus, parallax_modulus_bias_mag,
};

fn zp() -> Param {
    Param::ZeroPoint {
        relation: "V".into(),
    }
}
fn slope() -> Param {
    Param::Slope {
        relation: "V".into(),
    }
}
fn mu(node: &str) -> Param {
    Param::Modulus { node: node.into() }
}
fn peak() -> Param {
    Param::PeakMag {
        standardization: "stretch-colour".into(),
    }
}

/// The truth of a test chain: zero point −4.05 at log P = 1 (the V relation
/// of config/pulsator.toml), peak −19.25, H0 = 70.
const ZP: f64 = -4.05;
const M_SN: f64 = -19.25;
fn h_true() -> f64 {
    5.0 * 70f64.log10()
}

fn obs(
    target: &str,
    node: Option<&str>,
    rung: Rung,
    what: &str,
    coeffs: Vec<(Param, f64)>,
    terms: Vec<(&str, f64)>,
) -> Observation {
    Observation {
        target: target.into(),
        node: node.map(str::to_string),
        rung,
        what: what.into(),
        value_mag: 0.0,
        offset_mag: 0.0,
        coeffs,
        terms: terms.into_iter().map(|(n, s)| Term::new(n, s)).collect(),
        hours: 1.0,
    }
}

/// A chain description: anchors (σ parallax modulus, σ photometry, log P − 1),
/// hosts (stars (σ, log P − 1), calibrators σ), Hubble flow σ, optional slope prior.
#[derive(Debug, Clone)]
struct Spec {
    anchors: Vec<(f64, f64, f64)>,
    hosts: Vec<(Vec<(f64, f64)>, Vec<f64>)>,
    flow: Vec<f64>,
    slope_sigma: Option<f64>,
}

/// Build the chain with exact values at the truth (node moduli 30 + k for
/// hosts, 8 + k/10 for anchors), so the solution must return the truth.
fn build(spec: &Spec) -> Chain {
    let mut v = Vec::new();
    let with_slope = spec.slope_sigma.is_some();
    let pl = |x: f64| {
        let mut c = vec![(zp(), 1.0)];
        if with_slope {
            c.push((slope(), x));
        }
        c
    };
    for (i, (s_plx, s_ph, x)) in spec.anchors.iter().enumerate() {
        let name = format!("A{i}");
        let m = 8.0 + i as f64 / 10.0;
        let mut o = obs(
            &name,
            Some(&name),
            Rung::Anchor,
            "parallax",
            vec![(mu(&name), 1.0)],
            vec![("parallax", *s_plx)],
        );
        o.value_mag = m;
        v.push(o);
        let mut c = pl(*x);
        c.push((mu(&name), 1.0));
        let mut o = obs(
            &name,
            Some(&name),
            Rung::Anchor,
            "mean magnitude",
            c,
            vec![("relation scatter", *s_ph)],
        );
        o.value_mag = m + ZP + 2.0 * x; // offset a0 x with a0 = −2.43 would cancel; keep 2.0 as the "published" slope here
        o.offset_mag = 2.0 * x;
        v.push(o);
    }
    for (k, (stars, cals)) in spec.hosts.iter().enumerate() {
        let f = format!("F{k}");
        let m = 30.0 + k as f64;
        for (j, (s, x)) in stars.iter().enumerate() {
            let mut c = pl(*x);
            c.push((mu(&f), 1.0));
            let mut o = obs(
                &format!("F{k}-C{j}"),
                Some(&f),
                Rung::Host,
                "mean magnitude",
                c,
                vec![("relation scatter", *s)],
            );
            o.value_mag = m + ZP + 2.0 * x;
            o.offset_mag = 2.0 * x;
            v.push(o);
        }
        for (j, s) in cals.iter().enumerate() {
            let mut o = obs(
                &format!("F{k}-SN{j}"),
                Some(&f),
                Rung::Calibrator,
                "standardized peak",
                vec![(mu(&f), 1.0), (peak(), 1.0)],
                vec![("intrinsic scatter", *s)],
            );
            o.value_mag = m + M_SN;
            v.push(o);
        }
    }
    for (i, s) in spec.flow.iter().enumerate() {
        let off = 36.0 + i as f64 * 0.3; // 5 log10(c d̂) + 25 of some redshift
        let mut o = obs(
            &format!("H{i}"),
            None,
            Rung::HubbleFlow,
            "standardized peak",
            vec![(peak(), 1.0), (Param::Hubble, -1.0)],
            vec![("peculiar velocity", *s)],
        );
        o.value_mag = M_SN - h_true() + off;
        o.offset_mag = off;
        v.push(o);
    }
    if let Some(s) = spec.slope_sigma {
        v.push(obs(
            "V",
            None,
            Rung::Relation,
            "published slope",
            vec![(slope(), 1.0)],
            vec![("slope", s)],
        ));
    }
    Chain::new(v)
}

fn inv_sum(s: &[f64]) -> f64 {
    1.0 / s.iter().map(|x| 1.0 / (x * x)).sum::<f64>()
}

#[test]
fn a_tree_shaped_chain_equals_the_sequential_propagation() {
    // Three anchors, one host of four stars with one calibrator, five
    // Hubble-flow supernovae. Step by step: the zero point is the weighted
    // mean of the anchors (parallax and photometry in quadrature); the host's
    // modulus the weighted mean of its stars plus the zero point's variance;
    // the peak the calibrator's own σ plus the host's; h the peak's plus the
    // weighted mean of the flow.
    let spec = Spec {
        anchors: vec![(0.05, 0.21, -0.5), (0.08, 0.21, -0.3), (0.12, 0.21, -0.6)],
        hosts: vec![(
            vec![(0.22, 0.3), (0.25, 0.4), (0.21, 0.5), (0.30, 0.2)],
            vec![0.14],
        )],
        flow: vec![0.15, 0.16, 0.2, 0.14, 0.18],
        slope_sigma: None,
    };
    let chain = build(&spec);
    let sol = chain.solve().unwrap();
    assert!(sol.open.is_empty() && sol.left_out.is_empty());
    let v_zp = inv_sum(
        &spec
            .anchors
            .iter()
            .map(|(a, b, _)| a.hypot(*b))
            .collect::<Vec<_>>(),
    );
    let v_f_own = inv_sum(&spec.hosts[0].0.iter().map(|(s, _)| *s).collect::<Vec<_>>());
    let v_cal = 0.14f64.powi(2);
    let v_flow = inv_sum(&spec.flow);
    let want_zp = v_zp.sqrt();
    let want_f = (v_f_own + v_zp).sqrt();
    let want_m = (v_cal + v_f_own + v_zp).sqrt();
    let want_h = (v_cal + v_f_own + v_zp + v_flow).sqrt();
    let (zp_hat, zp_sig) = sol.get(&zp()).unwrap();
    assert!((zp_hat - ZP).abs() < 1e-10, "{zp_hat}");
    assert!((zp_sig - want_zp).abs() < 1e-12);
    assert!((sol.get(&mu("F0")).unwrap().1 - want_f).abs() < 1e-12);
    assert!((sol.get(&peak()).unwrap().1 - want_m).abs() < 1e-12);
    let b = chain.budget(&sol, &EndPoint::Hubble).unwrap();
    assert!(
        (b.sigma_mag - want_h).abs() < 1e-12,
        "{} vs {want_h}",
        b.sigma_mag
    );
    assert!((b.value_mag - h_true()).abs() < 1e-9);
    assert!((h0_from_intercept(b.value_mag) - 70.0).abs() < 1e-8);
    // By rung: exactly the sequential steps.
    let rung = |r: Rung| {
        b.by_rung
            .iter()
            .find(|s| s.rung == r)
            .unwrap()
            .sigma_mag
            .powi(2)
    };
    assert!((rung(Rung::Anchor) - v_zp).abs() < 1e-12);
    assert!((rung(Rung::Host) - v_f_own).abs() < 1e-12);
    assert!((rung(Rung::Calibrator) - v_cal).abs() < 1e-12);
    assert!((rung(Rung::HubbleFlow) - v_flow).abs() < 1e-12);
    let fr: f64 = b.by_term.iter().map(|s| s.variance_fraction).sum();
    assert!((fr - 1.0).abs() < 1e-12);
    // Own (the flow) and shared (the calibration below it).
    assert!((b.own_sigma_mag.powi(2) - v_flow).abs() < 1e-12);
    assert!((b.shared_sigma_mag.powi(2) - (v_cal + v_f_own + v_zp)).abs() < 1e-12);
    // A Hubble-flow supernova's distance: its own σ plus the peak's.
    let sn = chain
        .budget(
            &sol,
            &EndPoint::Supernova {
                target: "H2".into(),
            },
        )
        .unwrap();
    assert!((sn.own_sigma_mag - 0.2).abs() < 1e-12);
    assert!((sn.shared_sigma_mag - want_m).abs() < 1e-12);
    // σ_d/d = (ln 10 / 5) σ_μ (m − M = 5 log10 d/10 pc; a fact of the trade).
    assert!((sn.distance_pct - 46.051_701_86 * sn.sigma_mag).abs() < 1e-6);
    // The host's distance: its own stars and the zero point.
    let f = chain
        .budget(&sol, &EndPoint::Node { node: "F0".into() })
        .unwrap();
    assert!((f.own_sigma_mag.powi(2) - v_f_own).abs() < 1e-12);
    assert!((f.shared_sigma_mag.powi(2) - v_zp).abs() < 1e-12);
    assert!((f.value_mag - 30.0).abs() < 1e-9);
}

#[test]
fn two_hosts_share_the_zero_point_and_weight_their_own_errors() {
    // Closed form: each host-calibrator pair gives M with its own variance
    // (calibrator² + the host's own stars) and the zero point common to
    // both: σ_M² = 1 / Σ_k 1/(σ_cal,k² + σ_F,k²) + σ_zp².
    let spec = Spec {
        anchors: vec![(0.06, 0.2, 0.0)],
        hosts: vec![
            (vec![(0.2, 0.0), (0.2, 0.0)], vec![0.15]),
            (vec![(0.3, 0.0)], vec![0.12]),
        ],
        flow: vec![0.2],
        slope_sigma: None,
    };
    let chain = build(&spec);
    let sol = chain.solve().unwrap();
    let v_zp = 0.06f64.powi(2) + 0.2f64.powi(2);
    let pair = |s_cal: f64, v_f: f64| s_cal * s_cal + v_f;
    let want = (1.0 / (1.0 / pair(0.15, 0.02) + 1.0 / pair(0.12, 0.09)) + v_zp).sqrt();
    assert!((sol.get(&peak()).unwrap().1 - want).abs() < 1e-12);
}

#[test]
fn a_slope_prior_carries_the_period_gap_between_anchors_and_hosts() {
    // One anchor at log P − 1 = −0.5, one host star at +0.6, slope known to
    // ±0.12 mag/dex (the V slope error of config/pulsator.toml): the host's
    // modulus is off by (x_h − x_a) δa, so its variance gains (1.1 × 0.12)².
    let spec = Spec {
        anchors: vec![(0.05, 0.21, -0.5)],
        hosts: vec![(vec![(0.21, 0.6)], vec![0.14])],
        flow: vec![0.15],
        slope_sigma: Some(0.12),
    };
    let chain = build(&spec);
    let f = chain
        .end_point(&EndPoint::Node { node: "F0".into() })
        .unwrap();
    let want = 0.05f64.powi(2) + 0.21f64.powi(2) + 0.21f64.powi(2) + (1.1f64 * 0.12).powi(2);
    assert!((f.sigma_mag.powi(2) - want).abs() < 1e-12);
    let rel = f.by_rung.iter().find(|s| s.rung == Rung::Relation).unwrap();
    assert!((rel.sigma_mag - 0.132).abs() < 1e-12);
}

#[test]
fn an_open_chain_says_which_link_is_missing() {
    // No parallax: the relation has no anchor, so nothing above it closes.
    let spec = Spec {
        anchors: vec![],
        hosts: vec![(vec![(0.2, 0.0)], vec![0.15])],
        flow: vec![0.2],
        slope_sigma: None,
    };
    let chain = build(&spec);
    let e = chain.end_point(&EndPoint::Hubble).unwrap_err();
    assert!(matches!(e, ChainError::NotClosed(_)));
    let msg = e.to_string();
    assert!(
        msg.starts_with("the chain is not closed: relation V has no anchor"),
        "{msg}"
    );
    assert!(msg.contains("so F0 has no distance"), "{msg}");
    assert!(msg.contains("so the Hubble flow has no supernova"), "{msg}");
    let sol = chain.solve().unwrap();
    assert_eq!(sol.left_out.len(), chain.observations.len());
    // No Hubble-flow supernova: the host still has its distance.
    let spec = Spec {
        anchors: vec![(0.05, 0.2, 0.0)],
        hosts: vec![(vec![(0.2, 0.0)], vec![0.15])],
        flow: vec![],
        slope_sigma: None,
    };
    let chain = build(&spec);
    assert!(
        chain
            .end_point(&EndPoint::Node { node: "F0".into() })
            .is_ok()
    );
    let e = chain.end_point(&EndPoint::Hubble).unwrap_err().to_string();
    assert_eq!(
        e,
        "the chain is not closed: the Hubble flow has no supernova with a calibrated peak (give a supernova a redshift in the flow and no host)"
    );
    let e = chain
        .end_point(&EndPoint::Node { node: "F9".into() })
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "no end point 'F9': no field or anchor of that name"
    );
    // A perfect observation is refused, not divided by.
    let mut chain = build(&spec);
    chain.observations[0].terms[0].sigma_mag = 0.0;
    let e = chain.solve().unwrap_err().to_string();
    assert!(e.contains("its uncertainty is zero"), "{e}");
}

#[test]
fn parallax_modulus_and_its_bias() {
    // 10 mas is 100 pc, μ = 5 (m − M = 5 log10(d / 10 pc); a fact of the trade).
    let (m, s) = parallax_modulus(10.0, 0.5);
    assert!((m - 5.0).abs() < 1e-12);
    // 5 % in parallax is 0.1086 mag (5/ln 10 × 0.05).
    assert!((s - 0.108_573_6).abs() < 1e-6);
    // The second-order bias: 0.0109 mag at 10 %, checked against the mean of
    // −5 log10 over a Gaussian parallax by direct numerical integration here.
    let f: f64 = 0.1;
    let n = 20001;
    let mut acc = 0.0;
    let mut wsum = 0.0;
    for i in 0..n {
        let z = -6.0 + 12.0 * i as f64 / (n - 1) as f64;
        let w = (-0.5 * z * z).exp();
        acc += w * (-5.0 * (1.0 + f * z).log10());
        wsum += w;
    }
    let mean = acc / wsum;
    assert!(
        (mean - parallax_modulus_bias_mag(f)).abs() < 0.0005,
        "{mean}"
    );
}

/// A random chain: 1–4 anchors, 1–3 hosts of 1–6 stars with 1–2
/// calibrators, 1–8 Hubble-flow supernovae, periods spread, a slope prior.
fn random_spec(r: &mut Rng) -> Spec {
    let na = 1 + (r.uniform() * 4.0) as usize;
    let nh = 1 + (r.uniform() * 3.0) as usize;
    let nf = 1 + (r.uniform() * 8.0) as usize;
    Spec {
        anchors: (0..na)
            .map(|_| (r.range(0.02, 0.2), r.range(0.1, 0.3), r.range(-0.7, 0.0)))
            .collect(),
        hosts: (0..nh)
            .map(|_| {
                let ns = 1 + (r.uniform() * 6.0) as usize;
                let nc = 1 + (r.uniform() * 2.0) as usize;
                (
                    (0..ns)
                        .map(|_| (r.range(0.1, 0.4), r.range(0.0, 0.8)))
                        .collect(),
                    (0..nc).map(|_| r.range(0.1, 0.2)).collect(),
                )
            })
            .collect(),
        flow: (0..nf).map(|_| r.range(0.1, 0.3)).collect(),
        slope_sigma: Some(r.range(0.05, 0.15)),
    }
}

#[test]
fn monte_carlo_over_random_chains_matches_the_stated_budget() {
    // For each random chain, 1,500 noisy realisations: the scatter of ĥ, of
    // the first host's modulus and of a flow supernova's distance must match
    // the stated σ, and noise on one rung alone must give that rung's share.
    // With 1,500 draws a standard deviation is known to about ±1.8 % (1σ);
    // the tolerance is 7 %.
    let mut r = Rng(20261203);
    let draws = 1500;
    for _ in 0..4 {
        let spec = random_spec(&mut r);
        let chain = build(&spec);
        let sol = chain.solve().unwrap();
        let eps = [
            EndPoint::Hubble,
            EndPoint::Node { node: "F0".into() },
            EndPoint::Supernova {
                target: "H0".into(),
            },
        ];
        let budgets: Vec<_> = eps.iter().map(|e| chain.budget(&sol, e).unwrap()).collect();
        for only in [None, Some(Rung::Anchor), Some(Rung::Host)] {
            let mut sums = vec![(0.0, 0.0); eps.len()];
            for _ in 0..draws {
                let mut c = chain.clone();
                for o in &mut c.observations {
                    if only.is_some_and(|r0| r0 != o.rung) {
                        continue;
                    }
                    for t in &o.terms {
                        o.value_mag += t.sigma_mag * r.gauss();
                    }
                }
                let s = c.solve().unwrap();
                for (k, e) in eps.iter().enumerate() {
                    let v = c.budget(&s, e).unwrap().value_mag - budgets[k].value_mag;
                    sums[k].0 += v;
                    sums[k].1 += v * v;
                }
            }
            for (k, b) in budgets.iter().enumerate() {
                let mean = sums[k].0 / draws as f64;
                let sd = (sums[k].1 / draws as f64 - mean * mean).sqrt();
                let want = match only {
                    None => b.sigma_mag,
                    Some(r0) => b
                        .by_rung
                        .iter()
                        .find(|s| s.rung == r0)
                        .map_or(0.0, |s| s.sigma_mag),
                };
                if want == 0.0 {
                    assert!(sd < 1e-9, "{only:?} {:?}: {sd}", b.end_point);
                } else {
                    assert!(
                        (sd / want - 1.0).abs() < 0.07,
                        "{only:?} {:?}: scatter {sd} vs stated {want}",
                        b.end_point
                    );
                }
            }
        }
    }
}

/// One more observation of a random kind added to a chain.
fn add_one(spec: &Spec, which: u8, sigma: f64, x: f64) -> Spec {
    let mut s = spec.clone();
    match which % 6 {
        0 => s.anchors.push((sigma / 2.0, sigma, -x)),
        1 => s.hosts[0].0.push((sigma, x)),
        2 => s.hosts[0].1.push(sigma / 2.0),
        3 => s.flow.push(sigma),
        // One more epoch: an existing anchor's parallax gets better.
        4 => s.anchors[0].0 *= 0.8,
        // A new host with a star and a calibrator.
        _ => s.hosts.push((vec![(sigma, x)], vec![sigma / 2.0])),
    }
    s
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    #[test]
    fn adding_an_observation_never_increases_an_end_points_sigma(
        seed in any::<u64>(),
        which in 0u8..6,
        sigma in 0.05f64..0.5,
        x in 0.0f64..0.8,
    ) {
        let mut r = Rng(seed);
        let spec = random_spec(&mut r);
        let before = build(&spec);
        let after = build(&add_one(&spec, which, sigma, x));
        let (sb, sa) = (before.solve().unwrap(), after.solve().unwrap());
        let mut eps = vec![EndPoint::Hubble, EndPoint::Supernova { target: "H0".into() }];
        for k in 0..spec.hosts.len() {
            eps.push(EndPoint::Node { node: format!("F{k}") });
        }
        for e in &eps {
            let b = before.budget(&sb, e).unwrap().sigma_mag;
            let a = after.budget(&sa, e).unwrap().sigma_mag;
            prop_assert!(a <= b * (1.0 + 1e-12), "{:?}: {} -> {}", e, b, a);
        }
    }
}

#[test]
fn the_best_next_hour_goes_to_the_rung_that_limits() {
    use rung::ladder::chain::{Change, Step, rank};
    // One anchor with a poor parallax (0.25 mag, 11 %) under a well-measured
    // host and flow: an hour on the anchor buys most; a flow supernova,
    // whose rung is already small, buys least.
    let spec = Spec {
        anchors: vec![(0.25, 0.1, 0.0)],
        hosts: vec![(vec![(0.2, 0.0); 8], vec![0.12, 0.12])],
        flow: vec![0.15; 20],
        slope_sigma: None,
    };
    let chain = build(&spec);
    let sharper = |j: usize, s: f64| Change::Sharper {
        observation: j,
        terms: vec![Term::new("parallax", s)],
    };
    let mut extra_flow = chain.observations.last().unwrap().clone();
    extra_flow.target = "H-new".into();
    let mut extra_star = chain.observations[2].clone();
    extra_star.target = "F0-new".into();
    let steps = vec![
        Step {
            label: "anchor epoch".into(),
            rung: Rung::Anchor,
            target: "A0".into(),
            hours: 0.5,
            change: sharper(0, 0.22),
        },
        Step {
            label: "host star".into(),
            rung: Rung::Host,
            target: "F0".into(),
            hours: 0.5,
            change: Change::Added {
                observations: vec![extra_star],
            },
        },
        Step {
            label: "flow supernova".into(),
            rung: Rung::HubbleFlow,
            target: "H".into(),
            hours: 0.5,
            change: Change::Added {
                observations: vec![extra_flow],
            },
        },
        Step {
            label: "free".into(),
            rung: Rung::Anchor,
            target: "A0".into(),
            hours: 0.0,
            change: sharper(0, 0.01),
        },
    ];
    let ranked = rank(&chain, &EndPoint::Hubble, steps).unwrap();
    assert_eq!(ranked.len(), 3, "a step of no hours is not ranked");
    assert_eq!(ranked[0].step.label, "anchor epoch");
    assert_eq!(ranked[2].step.label, "flow supernova");
    for r in &ranked {
        assert!(r.after_pct <= r.before_pct);
        assert!((r.gain_pct_per_hour - (r.before_pct - r.after_pct) / 0.5).abs() < 1e-12);
    }
}

/// A chain shaped like a modern ladder measurement: `anchors` geometric
/// distances of `anchor_mag` each holding 50 Cepheids of 0.2 mag
/// scatter; `hosts` host galaxies of 30 Cepheids at 0.3 mag (crowded
/// fields) each with one calibrator of 0.13 mag; `flow` Hubble-flow
/// supernovae of 0.145 mag (scatter and peculiar velocity at z ≈ 0.05). The
/// per-object errors are orders of magnitude of the trade, quoted from memory.
fn modern_ladder(anchors: usize, anchor_mag: f64, hosts: usize, flow: usize) -> Chain {
    let mut v = Vec::new();
    for a in 0..anchors {
        let n = format!("anchor{a}");
        v.push(obs(
            &n,
            Some(&n),
            Rung::Anchor,
            "geometric distance",
            vec![(mu(&n), 1.0)],
            vec![("distance", anchor_mag)],
        ));
        for k in 0..50 {
            v.push(obs(
                &format!("{n}-C{k}"),
                Some(&n),
                Rung::Anchor,
                "mean magnitude",
                vec![(mu(&n), 1.0), (zp(), 1.0)],
                vec![("relation scatter", 0.2)],
            ));
        }
    }
    for h in 0..hosts {
        let n = format!("host{h}");
        for k in 0..30 {
            v.push(obs(
                &format!("{n}-C{k}"),
                Some(&n),
                Rung::Host,
                "mean magnitude",
                vec![(mu(&n), 1.0), (zp(), 1.0)],
                vec![("relation scatter", 0.3)],
            ));
        }
        v.push(obs(
            &format!("{n}-SN"),
            Some(&n),
            Rung::Calibrator,
            "standardized peak",
            vec![(mu(&n), 1.0), (peak(), 1.0)],
            vec![("intrinsic scatter", 0.13)],
        ));
    }
    for i in 0..flow {
        v.push(obs(
            &format!("HF{i}"),
            None,
            Rung::HubbleFlow,
            "standardized peak",
            vec![(peak(), 1.0), (Param::Hubble, -1.0)],
            vec![("intrinsic scatter", 0.145)],
        ));
    }
    Chain::new(v)
}

#[test]
fn a_modern_ladder_has_the_published_orders_of_magnitude() {
    // Riess et al. 2016 (ApJ 826, 56), abstract (checked): 19 Cepheid-
    // calibrated supernovae and about 300 Hubble-flow supernovae at
    // z < 0.15 give H0 to 2.4 % with three anchors; each anchor alone gives
    // 3.1–3.7 % (72.25 ± 2.51, 72.04 ± 2.67, 76.18 ± 2.37 km/s/Mpc).
    // Riess et al. 2022 (ApJL 934, L7), abstract (checked): 42 calibrators,
    // "more than doubling the sample whose size limits the precision", bring
    // the uncertainty to about 1 km/s/Mpc (1.4 %; the value from memory).
    // Anchors then: about 0.05 mag each (2.3 %, from memory); by 2022 the
    // LMC's was 1.2 % (Riess et al. 2019, ApJ 876, 85, abstract, checked),
    // 0.026 mag. The model has no systematics, so it may come out a little
    // better than the papers.
    let pct = |c: &Chain| c.end_point(&EndPoint::Hubble).unwrap();
    let r16 = pct(&modern_ladder(3, 0.05, 19, 300));
    assert!(
        (1.5..3.0).contains(&r16.distance_pct),
        "{}",
        r16.distance_pct
    );
    let share = |r: Rung| {
        r16.by_rung
            .iter()
            .find(|s| s.rung == r)
            .unwrap()
            .variance_fraction
    };
    // The Hubble flow, with hundreds of supernovae, matters least.
    assert!(share(Rung::HubbleFlow) < share(Rung::Anchor));
    assert!(share(Rung::HubbleFlow) < share(Rung::Calibrator));
    assert!(
        100.0
            * 0.4605
            * r16
                .by_rung
                .iter()
                .find(|s| s.rung == Rung::HubbleFlow)
                .unwrap()
                .sigma_mag
            < 0.5
    );
    let one_anchor = pct(&modern_ladder(1, 0.05, 19, 300));
    assert!(
        (2.5..4.5).contains(&one_anchor.distance_pct),
        "{}",
        one_anchor.distance_pct
    );
    let r22 = pct(&modern_ladder(3, 0.026, 42, 300));
    assert!(
        (1.0..2.0).contains(&r22.distance_pct),
        "{}",
        r22.distance_pct
    );
    // More calibrators (with better anchors) cut the error by a fifth or
    // more, while three times the Hubble flow hardly moves it.
    assert!(r22.distance_pct < 0.8 * r16.distance_pct);
    let more_flow = pct(&modern_ladder(3, 0.05, 19, 900));
    assert!(more_flow.distance_pct > 0.97 * r16.distance_pct);
}
