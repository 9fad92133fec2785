//! The allocation of hours asked among a programme's goals is the exact
//! optimum: on random small programmes it equals the exhaustive search over
//! every subset (largest priority-weighted number of goals met, then fewest
//! hours), never exceeds the hours asked (in total or per semester), and the
//! goals-met curve agrees with the optimum at every number of hours.

use rung::plan::budget::alloc::{Capacity, Item, NightCost, Problem, allocate, exhaustive, steps};

/// A small deterministic generator (xorshift64*), so every run tries the same programmes.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() * n as f64) as usize % n.max(1)
    }
}

fn programme(r: &mut Rng, n: usize, semesters: usize, integer_weights: bool) -> Problem {
    let n_nights = 1 + r.below(12);
    let nights: Vec<NightCost> = (0..n_nights)
        .map(|_| NightCost {
            semester: r.below(semesters),
            hours: if r.next() < 0.3 {
                0.0
            } else {
                0.05 + 0.3 * r.next()
            },
        })
        .collect();
    let items = (0..n)
        .map(|_| {
            let weight = if integer_weights {
                1.0 + r.below(3) as f64
            } else {
                0.2 + 3.0 * r.next()
            };
            let mut hours = vec![0.0; semesters];
            for h in hours.iter_mut() {
                if r.next() < 0.7 {
                    *h = 0.1 + 5.0 * r.next() * r.next();
                }
            }
            let mut ns: Vec<usize> = (0..1 + r.below(4)).map(|_| r.below(n_nights)).collect();
            ns.sort_unstable();
            ns.dedup();
            Item {
                weight,
                hours,
                nights: ns,
            }
        })
        .collect();
    Problem {
        items,
        nights,
        semesters,
    }
}

fn fits(p: &Problem, set: &[usize], cap: &Capacity) -> bool {
    let c = p.cost(set);
    match cap {
        Capacity::Total(h) => c.iter().sum::<f64>() <= h + 1e-6,
        Capacity::PerSemester(hs) => c.iter().zip(hs).all(|(c, h)| *c <= h + 1e-6),
    }
}

#[test]
fn allocation_equals_the_exhaustive_optimum_on_random_small_programmes() {
    let mut r = Rng(0x5eed_b0d9_e7a1_1c47);
    let mut tried = 0;
    for case in 0..400 {
        let n = 1 + r.below(12);
        let sem = 1 + r.below(3);
        let p = programme(&mut r, n, sem, case % 2 == 0);
        let total: f64 = p.cost(&(0..n).collect::<Vec<_>>()).iter().sum();
        let cap = if case % 3 == 0 {
            Capacity::PerSemester((0..sem).map(|_| total / sem as f64 * r.next()).collect())
        } else {
            Capacity::Total(total * r.next() * 1.1)
        };
        let a = allocate(&p, &cap);
        let e = exhaustive(&p, &cap);
        assert!(a.proven_optimal);
        assert!(
            (a.weight - e.weight).abs() < 1e-9,
            "case {case}: weight {} vs exhaustive {} ({:?} vs {:?})",
            a.weight,
            e.weight,
            a.items,
            e.items
        );
        assert!(
            (a.hours - e.hours).abs() < 1e-6,
            "case {case}: hours {} vs exhaustive {}",
            a.hours,
            e.hours
        );
        // Never more than the hours asked.
        assert!(fits(&p, &a.items, &cap), "case {case}");
        assert_eq!(a.hours_by_semester, p.cost(&a.items));
        tried += 1;
    }
    assert_eq!(tried, 400);
}

#[test]
fn goals_met_curve_is_the_optimum_at_every_number_of_hours() {
    let mut r = Rng(0x0dd5_7e95_c0de_0001);
    for case in 0..60 {
        let n = 1 + r.below(10);
        let sem = 1 + r.below(2);
        let p = programme(&mut r, n, sem, case % 2 == 1);
        let st = steps(&p);
        // Steps climb in hours and in weight.
        for w in st.windows(2) {
            assert!(
                w[1].hours > w[0].hours - 1e-9 && w[1].weight > w[0].weight,
                "case {case}"
            );
        }
        let total: f64 = p.cost(&(0..n).collect::<Vec<_>>()).iter().sum();
        for k in 0..25 {
            let h = total * 1.05 * k as f64 / 24.0;
            let e = exhaustive(&p, &Capacity::Total(h));
            let from_curve = st
                .iter()
                .filter(|s| s.hours <= h + 1e-9)
                .map(|s| s.weight)
                .fold(0.0, f64::max);
            assert!(
                (e.weight - from_curve).abs() < 1e-9,
                "case {case}, {h} h: exhaustive {} vs curve {from_curve}",
                e.weight
            );
        }
    }
}

#[test]
fn nothing_asked_meets_nothing() {
    let mut r = Rng(7);
    let p = programme(&mut r, 6, 1, true);
    let a = allocate(&p, &Capacity::Total(0.0));
    assert!(
        a.items
            .iter()
            .all(|&i| p.cost(&[i]).iter().sum::<f64>() == 0.0)
    );
}
