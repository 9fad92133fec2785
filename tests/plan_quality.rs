//! How good the scheduler's packing is, measured.
//!
//! 1. On small random packing problems (`rung::plan::pack::Problem`: two or
//!    three nights, a handful of targets with spacings, visits with
//!    alternatives on other nights, fixed visits), the packer's
//!    priority-weighted value is compared with the exact optimum of the same
//!    problem, found by an integer program (the `microlp` crate's branch and
//!    bound) on a 5-minute grid. All times are whole multiples of 5 minutes
//!    and durations of 10 minutes, so the grid loses nothing: rounding every
//!    start of a feasible packing down to the grid keeps it feasible (window
//!    edges, ends of other visits and spacings are on the grid), so the grid
//!    optimum is the optimum.
//! 2. On the demo programme (two weeks at 8 h a night, as the README's
//!    example), the packer's value is compared with an upper bound: the linear
//!    relaxation of a relaxed problem (each visit at most once per group,
//!    each night's capacity, the time inside each window, and pairs of visits
//!    of one target that can never be spaced apart), which no packing can beat.
//!
//! The figures printed here are the README's "Scheduler quality" table.

use microlp::{ComparisonOp, OptimizationDirection, Problem as Lp};
use rung::plan::pack::{Fixed, Item, Problem, check, pack, value};

const U: f64 = 300.0; // the grid: 5 minutes
const NIGHT_UNITS: i64 = 36; // 3 h nights
const NIGHT_GAP: i64 = 1000; // nights far apart on one time axis

struct Lcg(u64);
impl Lcg {
    fn next(&mut self) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        self.0 >> 33
    }
    fn range(&mut self, lo: i64, hi: i64) -> i64 {
        lo + (self.next() % ((hi - lo + 1) as u64)) as i64
    }
}

/// A random small problem; every time in grid units times `U`.
fn random_problem(seed: u64) -> Problem {
    let mut r = Lcg(seed.wrapping_add(17));
    let nights = r.range(2, 3) as usize;
    let targets = r.range(3, 5) as usize;
    let spacing_s: Vec<f64> = (0..targets)
        .map(|_| [0.0, 6.0, 12.0][r.range(0, 2) as usize] * U)
        .collect();
    let priority: Vec<f64> = (0..targets).map(|_| r.range(1, 3) as f64).collect();
    let capacity_s: Vec<f64> = (0..nights).map(|_| r.range(14, 36) as f64 * U).collect();
    let mut fixed = Vec::new();
    for n in 0..nights {
        if r.range(0, 2) == 0 {
            let s = r.range(0, NIGHT_UNITS - 4);
            let d = r.range(1, 2) * 2;
            fixed.push(Fixed {
                target: r.range(0, targets as i64 - 1) as usize,
                night: n,
                start_s: ((n as i64 * NIGHT_GAP + s) as f64) * U,
                end_s: ((n as i64 * NIGHT_GAP + s + d) as f64) * U,
            });
        }
    }
    let groups = r.range(4, 8) as usize;
    let mut items = Vec::new();
    for g in 0..groups {
        let t = r.range(0, targets as i64 - 1) as usize;
        let dur = r.range(1, 4) * 2;
        // Some groups are the fill: a fraction of the priority.
        let v = if r.range(0, 3) == 0 {
            priority[t] * [0.1, 0.3, 0.6][r.range(0, 2) as usize]
        } else {
            priority[t]
        };
        let home = r.range(0, nights as i64 - 1);
        let alts = r.range(1, nights.min(3) as i64);
        for (rank, k) in [0i64, -1, 1].iter().take(alts as usize).enumerate() {
            let n = home + k;
            if n < 0 || n >= nights as i64 {
                continue;
            }
            let a = r.range(0, NIGHT_UNITS - dur);
            let b = r.range(a + dur, NIGHT_UNITS);
            let pref = r.range(a, b - dur);
            let off = n * NIGHT_GAP;
            items.push(Item {
                group: g,
                rank,
                target: t,
                night: n as usize,
                value: v,
                dur_s: dur as f64 * U,
                pref_s: (off + pref) as f64 * U,
                windows: vec![((off + a) as f64 * U, (off + b) as f64 * U)],
            });
        }
    }
    Problem {
        capacity_s,
        spacing_s,
        items,
        fixed,
    }
}

/// The exact optimum of a grid problem: binary x(item, start) on the grid.
fn exact_optimum(p: &Problem) -> f64 {
    let mut lp = Lp::new(OptimizationDirection::Maximize);
    let unit = |x: f64| (x / U).round() as i64;
    // (item, start unit, var)
    let mut vars = Vec::new();
    for (i, it) in p.items.iter().enumerate() {
        let d = unit(it.dur_s);
        for &(w0, w1) in &it.windows {
            for s in unit(w0)..=unit(w1) - d {
                let mid2 = 2 * s + d; // twice the mid-time, in units
                // Starts that meet a fixed visit (time or spacing) are not variables.
                let clash = p.fixed.iter().any(|f| {
                    let (fs, fe) = (unit(f.start_s), unit(f.end_s));
                    (f.night == it.night && s < fe && fs < s + d)
                        || (f.target == it.target
                            && ((fs + fe) - mid2).abs() < 2 * unit(p.spacing_s[it.target]))
                });
                if !clash {
                    vars.push((i, s, lp.add_binary_var(it.value)));
                }
            }
        }
    }
    // One start per group.
    let groups: std::collections::BTreeSet<usize> = p.items.iter().map(|it| it.group).collect();
    for g in groups {
        let row: Vec<_> = vars
            .iter()
            .filter(|(i, _, _)| p.items[*i].group == g)
            .map(|(_, _, v)| (*v, 1.0))
            .collect();
        if !row.is_empty() {
            lp.add_constraint(row.clone(), ComparisonOp::Le, 1.0);
        }
    }
    for n in 0..p.capacity_s.len() {
        let fixed_u: i64 = p
            .fixed
            .iter()
            .filter(|f| f.night == n)
            .map(|f| unit(f.end_s) - unit(f.start_s))
            .sum();
        let row: Vec<_> = vars
            .iter()
            .filter(|(i, _, _)| p.items[*i].night == n)
            .map(|(i, _, v)| (*v, unit(p.items[*i].dur_s) as f64))
            .collect();
        if !row.is_empty() {
            lp.add_constraint(
                row.clone(),
                ComparisonOp::Le,
                (unit(p.capacity_s[n]) - fixed_u) as f64,
            );
        }
        // No two at once: each grid cell of the night holds at most one visit.
        let base = n as i64 * NIGHT_GAP;
        for c in base..base + NIGHT_UNITS {
            let row: Vec<_> = vars
                .iter()
                .filter(|(i, s, _)| {
                    p.items[*i].night == n && *s <= c && c < *s + unit(p.items[*i].dur_s)
                })
                .map(|(_, _, v)| (*v, 1.0))
                .collect();
            if row.len() > 1 {
                lp.add_constraint(row.clone(), ComparisonOp::Le, 1.0);
            }
        }
    }
    // Spacing between two visits of one target.
    for (a, (i, s, x)) in vars.iter().enumerate() {
        for (j, t, y) in &vars[a + 1..] {
            let (ii, jj) = (&p.items[*i], &p.items[*j]);
            if ii.group == jj.group || ii.target != jj.target {
                continue;
            }
            let m1 = 2 * s + unit(ii.dur_s);
            let m2 = 2 * t + unit(jj.dur_s);
            if (m1 - m2).abs() < 2 * unit(p.spacing_s[ii.target]) {
                lp.add_constraint([(*x, 1.0), (*y, 1.0)], ComparisonOp::Le, 1.0);
            }
        }
    }
    let out = lp.solve().expect("the integer program solves");
    assert!(
        out.is_optimal(),
        "the integer program stopped before its optimum"
    );
    out.into_solution().expect("a solution").objective()
}

#[test]
fn packing_reaches_the_exact_optimum_on_small_random_problems() {
    let n = 40;
    let mut ratios = Vec::new();
    let mut optimal = 0;
    for seed in 0..n {
        let p = random_problem(seed);
        let sol = pack(&p);
        check(&p, &sol).unwrap_or_else(|e| panic!("seed {seed}: {e}"));
        let got = value(&p, &sol);
        let best = exact_optimum(&p);
        assert!(
            got <= best + 1e-6,
            "seed {seed}: packing {got} above the 'optimum' {best}: the integer program is wrong"
        );
        let ratio = if best > 0.0 { got / best } else { 1.0 };
        if ratio > 1.0 - 1e-9 {
            optimal += 1;
        }
        ratios.push(ratio);
    }
    let mean = ratios.iter().sum::<f64>() / ratios.len() as f64;
    let worst = ratios.iter().cloned().fold(f64::INFINITY, f64::min);
    println!(
        "random problems: {n}, packing at the optimum on {optimal}, mean {:.1} % of the optimum, worst {:.1} %",
        100.0 * mean,
        100.0 * worst
    );
    assert!(mean >= 0.95, "mean {mean}");
}

/// An upper bound on any packing of `p`: the linear relaxation of a relaxed problem.
fn relaxed_bound(p: &Problem) -> f64 {
    let mut lp = Lp::new(OptimizationDirection::Maximize);
    let x: Vec<_> = p
        .items
        .iter()
        .map(|it| lp.add_var(it.value, (0.0, 1.0)))
        .collect();
    let mut by_group: std::collections::BTreeMap<usize, Vec<usize>> = Default::default();
    for (i, it) in p.items.iter().enumerate() {
        by_group.entry(it.group).or_default().push(i);
    }
    for items in by_group.values() {
        let row: Vec<_> = items.iter().map(|&i| (x[i], 1.0)).collect();
        lp.add_constraint(row.clone(), ComparisonOp::Le, 1.0);
    }
    for n in 0..p.capacity_s.len() {
        let fixed_s: f64 = p
            .fixed
            .iter()
            .filter(|f| f.night == n)
            .map(|f| f.end_s - f.start_s)
            .sum();
        let row: Vec<_> = p
            .items
            .iter()
            .enumerate()
            .filter(|(_, it)| it.night == n)
            .map(|(i, it)| (x[i], it.dur_s))
            .collect();
        if !row.is_empty() {
            lp.add_constraint(
                row.clone(),
                ComparisonOp::Le,
                (p.capacity_s[n] - fixed_s).max(0.0),
            );
        }
    }
    // The time inside each window holds at most the visits that must lie in it.
    let mut seen = std::collections::BTreeSet::new();
    for it in &p.items {
        for &(a, b) in &it.windows {
            if !seen.insert((it.night, a.to_bits(), b.to_bits())) {
                continue;
            }
            let inside: Vec<_> = p
                .items
                .iter()
                .enumerate()
                .filter(|(_, j)| {
                    j.night == it.night && j.windows.iter().all(|w| w.0 >= a && w.1 <= b)
                })
                .map(|(k, j)| (x[k], j.dur_s))
                .collect();
            let fixed_in: f64 = p
                .fixed
                .iter()
                .filter(|f| f.night == it.night)
                .map(|f| (f.end_s.min(b) - f.start_s.max(a)).max(0.0))
                .sum();
            if inside.len() > 1 {
                lp.add_constraint(
                    inside.clone(),
                    ComparisonOp::Le,
                    (b - a - fixed_in).max(0.0),
                );
            }
        }
    }
    // Two visits of one target that can never be far enough apart.
    let span = |it: &Item| {
        let lo = it.windows.iter().map(|w| w.0).fold(f64::INFINITY, f64::min) + it.dur_s / 2.0;
        let hi = it
            .windows
            .iter()
            .map(|w| w.1)
            .fold(f64::NEG_INFINITY, f64::max)
            - it.dur_s / 2.0;
        (lo, hi)
    };
    for (i, a) in p.items.iter().enumerate() {
        for (j, b) in p.items.iter().enumerate().skip(i + 1) {
            if a.target != b.target || a.group == b.group {
                continue;
            }
            let (a0, a1) = span(a);
            let (b0, b1) = span(b);
            let widest = (a1 - b0).abs().max((b1 - a0).abs());
            if widest < p.spacing_s[a.target] {
                lp.add_constraint([(x[i], 1.0), (x[j], 1.0)], ComparisonOp::Le, 1.0);
            }
        }
    }
    let out = lp.solve().expect("the relaxation solves");
    assert!(out.is_optimal());
    out.into_solution().expect("a solution").objective()
}

#[test]
fn the_demo_plan_against_an_upper_bound_and_its_night_fill() {
    use rung::plan::schedule::{Request, schedule};
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let targets = rung::io::targets::load(&demo).unwrap().targets;
    let now = rung::astro::time::parse_instant("2026-12-01T12:00:00Z").unwrap();
    let cfg = tempfile::tempdir().unwrap();
    // SAFETY: set before any other thread of this test binary reads it.
    unsafe { std::env::set_var("RUNG_CONFIG_DIR", cfg.path()) };
    let req = rung::programme::Request {
        cli: rung::programme::Choices {
            from: Some("2026-12-01".into()),
            to: Some("2026-12-14".into()),
            ..Default::default()
        },
        programme: Some(demo.clone()),
        method_files: Default::default(),
    };
    let st = rung::programme::Settings::resolve(&req, now).unwrap();
    let mut r = Request::programme(&st, &targets, 8.0);
    // The demo programme runs to 2029-05-31 (its thirty months).
    r.horizon_to = "2029-05-31".parse().unwrap();
    let s = schedule(&r).unwrap();
    let got = value(&s.problem, &s.placements);
    let bound = relaxed_bound(&s.problem);
    let used: f64 = s.nights.iter().map(|n| n.used_hours).sum();
    let cap: f64 = s.nights.iter().map(|n| n.capacity_hours).sum();
    // A visit's exposure time, all its frames (the README quotes the range).
    let open_s = s.visits.iter().map(|v| v.exptime_s);
    let shortest_s = open_s.clone().fold(f64::INFINITY, f64::min);
    let longest_s = open_s.fold(0.0, f64::max);
    println!(
        "demo, 2026-12-01 to 2026-12-14 at 8 h: value {got:.2} of an upper bound {bound:.2} ({:.1} %); {} visits ({shortest_s:.0} s to {:.0} min open), {used:.1} of {cap:.1} h used ({:.0} %), per night {}",
        100.0 * got / bound,
        s.visits.len(),
        longest_s / 60.0,
        100.0 * used / cap,
        s.nights
            .iter()
            .map(|n| format!("{:.0}", 100.0 * n.used_fraction))
            .collect::<Vec<_>>()
            .join(" ")
    );
    assert!(got <= bound + 1e-6);
    assert!(got >= 0.95 * bound, "{got} of {bound}");
}
