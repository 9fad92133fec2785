//! The allocation of hours asked among a programme's goals: which goals to
//! meet so that the priority-weighted number of goals met is largest, within
//! the hours (in total, or per semester), with calibrations charged once per
//! night used.
//!
//! # The problem
//!
//! Each *item* (a target, or a field observed as one unit) has a weight (its
//! priority), the hours its goal takes in each semester, and the nights its
//! epochs fall on. A night costs its calibration once, however many items
//! use it. A set S of items costs, in semester s,
//!
//! C_s(S) = Σ_{i ∈ S} c_i,s + Σ_{n ∈ nights(S), semester(n) = s} k_n
//!
//! and is allowed when Σ_s C_s(S) ≤ H (hours in total) or C_s(S) ≤ H_s for
//! every s (hours per semester). Among the allowed sets the allocation takes
//! the one of largest total weight, then of fewest hours. Without the shared
//! calibrations this is the 0/1 knapsack problem (one constraint) or the
//! multi-dimensional knapsack (per semester), both NP-hard; programmes are
//! small enough (tens to hundreds of goals) for an exact search.
//!
//! # The method
//!
//! Depth-first branch and bound, items in order of weight per hour (Martello &
//! Toth, *Knapsack Problems*, 1990, ch. 2: the bound of Dantzig's fractional
//! relaxation). A set's true cost is at least the sum of its items' own hours
//! (calibrations only add), so the fractional bound over the items' own hours
//! is a valid upper bound on the weight still reachable, and the search is
//! exact. It runs in two passes: the largest weight within the hours, then the
//! fewest hours that still give that weight (a covering search bounded the
//! same way). A search that passes [`NODE_LIMIT`] nodes stops with the best set
//! found and says it is not proven optimal.
//!
//! [`exhaustive`] tries every subset; the tests hold [`allocate`] to it on
//! random small programmes.

use serde::Serialize;

/// Weights that differ by less than this are equal.
const EPS_W: f64 = 1e-9;
/// Hours that differ by less than this are equal (0.36 ms).
const EPS_H: f64 = 1e-7;
/// Nodes a search may visit before it stops with its best set.
pub const NODE_LIMIT: u64 = 4_000_000;

/// One unit of the programme that meets a goal or not.
#[derive(Debug, Clone, PartialEq)]
pub struct Item {
    /// Weight of its goal (the target's priority; > 0).
    pub weight: f64,
    /// Its own hours by semester index (with weather), without calibrations.
    pub hours: Vec<f64>,
    /// The nights (indices into [`Problem::nights`]) its epochs fall on.
    pub nights: Vec<usize>,
}

impl Item {
    fn own_total(&self) -> f64 {
        self.hours.iter().sum()
    }
}

/// A night's shared cost.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NightCost {
    /// Semester index of the night.
    pub semester: usize,
    /// Calibration hours charged when any item uses the night.
    pub hours: f64,
}

/// The hours available.
#[derive(Debug, Clone, PartialEq)]
pub enum Capacity {
    /// Hours in total, over every semester.
    Total(f64),
    /// Hours in each semester (by index).
    PerSemester(Vec<f64>),
}

/// An allocation problem.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// The items.
    pub items: Vec<Item>,
    /// The nights with their calibration cost.
    pub nights: Vec<NightCost>,
    /// Number of semesters (length of each item's `hours`).
    pub semesters: usize,
}

/// The chosen set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Choice {
    /// Indices of the chosen items, ascending.
    pub items: Vec<usize>,
    /// Their total weight.
    pub weight: f64,
    /// Hours by semester (items and calibrations).
    pub hours_by_semester: Vec<f64>,
    /// Hours in total.
    pub hours: f64,
    /// Whether the search finished (false: stopped at [`NODE_LIMIT`] with the best found).
    pub proven_optimal: bool,
}

impl Problem {
    /// The cost of a set by semester (items' own hours and each used night's
    /// calibration once).
    pub fn cost(&self, set: &[usize]) -> Vec<f64> {
        let mut c = vec![0.0; self.semesters];
        let mut used = vec![false; self.nights.len()];
        for &i in set {
            for (s, h) in self.items[i].hours.iter().enumerate() {
                c[s] += h;
            }
            for &n in &self.items[i].nights {
                if !used[n] {
                    used[n] = true;
                    c[self.nights[n].semester] += self.nights[n].hours;
                }
            }
        }
        c
    }

    fn choice(&self, mut set: Vec<usize>, proven: bool) -> Choice {
        set.sort_unstable();
        let c = self.cost(&set);
        Choice {
            weight: set.iter().map(|&i| self.items[i].weight).sum(),
            hours: c.iter().sum(),
            hours_by_semester: c,
            items: set,
            proven_optimal: proven,
        }
    }
}

fn fits(c: &[f64], cap: &Capacity) -> bool {
    match cap {
        Capacity::Total(h) => c.iter().sum::<f64>() <= h + EPS_H,
        Capacity::PerSemester(hs) => c.iter().zip(hs).all(|(c, h)| *c <= h + EPS_H),
    }
}

fn room(cap: &Capacity) -> f64 {
    match cap {
        Capacity::Total(h) => *h,
        Capacity::PerSemester(hs) => hs.iter().sum(),
    }
}

/// The search state: the set so far and its cost, kept incrementally.
struct Search<'a> {
    p: &'a Problem,
    /// Items worth considering, best weight per own hour first.
    order: Vec<usize>,
    cap: &'a Capacity,
    cost: Vec<f64>,
    night_use: Vec<u32>,
    set: Vec<usize>,
    weight: f64,
    nodes: u64,
    stopped: bool,
    /// Running sums over `order`, to decide most bounds without their loops.
    pre: Prefix,
}

/// Running sums of the items' weights and own hours in search order, with
/// which [`Search::bound`] and [`Search::cover_bound`] are estimated in a
/// binary search instead of a walk over the remaining items. An estimate is
/// used only when it decides the pruning test beyond its error bound;
/// otherwise the walk decides, so the search prunes exactly as the walk
/// alone would (same nodes, same answers).
struct Prefix {
    /// Σ weight of `order[..m]`.
    w: Vec<f64>,
    /// Σ own hours of `order[..m]`.
    h: Vec<f64>,
    /// Error bounds of a difference of two sums against the walk's own
    /// running sum (n u Σ, Higham, *Accuracy and Stability of Numerical
    /// Algorithms*, 2002, ch. 4, widened a hundredfold).
    tol_w: f64,
    tol_h: f64,
    /// Largest own hours per weight and weight per own hour of an item
    /// (the latter infinite when an item takes no hours).
    h_per_w: f64,
    w_per_h: f64,
}

impl Prefix {
    fn new(p: &Problem, order: &[usize]) -> Self {
        let (mut w, mut h) = (vec![0.0], vec![0.0]);
        let (mut h_per_w, mut w_per_h) = (0.0f64, 0.0f64);
        for &i in order {
            let (wi, hi) = (p.items[i].weight, p.items[i].own_total());
            w.push(w.last().copied().unwrap_or(0.0) + wi);
            h.push(h.last().copied().unwrap_or(0.0) + hi);
            h_per_w = h_per_w.max(hi / wi);
            w_per_h = w_per_h.max(if hi > 0.0 { wi / hi } else { f64::INFINITY });
        }
        let scale = 1e-14 * (order.len() as f64 + 10.0);
        let tol_w = scale * (w.last().copied().unwrap_or(0.0).abs() + 1.0);
        let tol_h = scale * (h.last().copied().unwrap_or(0.0).abs() + 1.0);
        Prefix {
            w,
            h,
            tol_w,
            tol_h,
            h_per_w,
            w_per_h,
        }
    }
}

/// Whether `x + est` (est within `err` of the exact term) is surely
/// greater than `limit` (Some(true)), surely at most it (Some(false)), or
/// too near to say (None). The sum's own rounding is in the margin.
fn surely_above(x: f64, (est, err): (f64, f64), limit: f64) -> Option<bool> {
    if !(est.is_finite() && err.is_finite() && x.is_finite()) {
        return None;
    }
    let v = x + est;
    let e = err + 1e-12 * (x.abs() + est.abs()) + 1e-300;
    if v - e > limit {
        Some(true)
    } else if v + e < limit {
        Some(false)
    } else {
        None
    }
}

impl<'a> Search<'a> {
    fn new(p: &'a Problem, cap: &'a Capacity) -> Self {
        let mut order: Vec<usize> = (0..p.items.len())
            .filter(|&i| {
                let it = &p.items[i];
                it.weight > 0.0 && it.own_total().is_finite() && {
                    // An item that alone does not fit never fits.
                    fits(&p.cost(&[i]), cap)
                }
            })
            .collect();
        order.sort_by(|&a, &b| {
            let ra = p.items[a].weight / p.items[a].own_total().max(1e-12);
            let rb = p.items[b].weight / p.items[b].own_total().max(1e-12);
            rb.total_cmp(&ra).then(a.cmp(&b))
        });
        let pre = Prefix::new(p, &order);
        Search {
            pre,
            p,
            order,
            cap,
            cost: vec![0.0; p.semesters],
            night_use: vec![0; p.nights.len()],
            set: Vec::new(),
            weight: 0.0,
            nodes: 0,
            stopped: false,
        }
    }

    fn add(&mut self, i: usize) {
        let it = &self.p.items[i];
        for (s, h) in it.hours.iter().enumerate() {
            self.cost[s] += h;
        }
        for &n in &it.nights {
            if self.night_use[n] == 0 {
                self.cost[self.p.nights[n].semester] += self.p.nights[n].hours;
            }
            self.night_use[n] += 1;
        }
        self.set.push(i);
        self.weight += it.weight;
    }

    fn remove(&mut self, i: usize) {
        let it = &self.p.items[i];
        for (s, h) in it.hours.iter().enumerate() {
            self.cost[s] -= h;
        }
        for &n in &it.nights {
            self.night_use[n] -= 1;
            if self.night_use[n] == 0 {
                self.cost[self.p.nights[n].semester] -= self.p.nights[n].hours;
            }
        }
        self.set.pop();
        self.weight -= it.weight;
    }

    fn total(&self) -> f64 {
        self.cost.iter().sum()
    }

    /// Dantzig's bound: the weight still reachable from position `k` with
    /// `left` hours, items taken fractionally in order.
    fn bound(&self, k: usize, left: f64) -> f64 {
        // A branch may stand up to EPS_H over its cap (`fits`): its room is
        // then a hair below zero, where a goal of no hours of its own still
        // fits; counting from zero keeps the bound a bound (it can only
        // prune less). A case where this mattered was reported but not
        // reproduced by tests/budget_alloc.rs.
        let mut left = left.max(0.0);
        let mut w = 0.0;
        for &i in &self.order[k..] {
            let it = &self.p.items[i];
            let h = it.own_total();
            if h <= left {
                left -= h;
                w += it.weight;
            } else {
                if h > 0.0 {
                    w += it.weight * left.max(0.0) / h;
                }
                break;
            }
        }
        w
    }

    /// [`Self::bound`] from the running sums, with its error bound; None
    /// where the walk's special cases apply (no hours left, an item of no
    /// hours).
    fn bound_estimate(&self, k: usize, left: f64) -> Option<(f64, f64)> {
        let pre = &self.pre;
        if !(left >= 0.0 && left.is_finite() && pre.w_per_h.is_finite()) {
            return None;
        }
        let n = self.order.len();
        // The first item that does not fit whole.
        let m = k + pre.h[k + 1..=n].partition_point(|x| x - pre.h[k] <= left);
        let err = 4.0 * (pre.tol_w + pre.w_per_h * pre.tol_h);
        if m == n {
            return Some((pre.w[n] - pre.w[k], err));
        }
        let it = &self.p.items[self.order[m]];
        let rest = (left - (pre.h[m] - pre.h[k])).max(0.0);
        Some((pre.w[m] - pre.w[k] + it.weight * rest / it.own_total(), err))
    }

    /// Whether the branch from `k` with `left` hours cannot beat `best_w`:
    /// `self.weight + self.bound(k, left) <= best_w + EPS_W`, decided by the
    /// estimate when it is sure, else by the walk.
    fn bound_prunes(&self, k: usize, left: f64, best_w: f64) -> bool {
        let limit = best_w + EPS_W;
        if let Some(est) = self.bound_estimate(k, left)
            && let Some(above) = surely_above(self.weight, est, limit)
        {
            return !above;
        }
        self.weight + self.bound(k, left) <= limit
    }

    /// [`Self::cover_bound`] from the running sums, with its error bound
    /// (infinite estimate: surely no cover); None when too near the edge
    /// between a cover and none to say.
    fn cover_estimate(&self, k: usize, need: f64) -> Option<(f64, f64)> {
        let pre = &self.pre;
        if need <= EPS_W || !need.is_finite() {
            return None;
        }
        let n = self.order.len();
        let all = pre.w[n] - pre.w[k];
        if all < need - 4.0 * pre.tol_w {
            return Some((f64::INFINITY, 0.0));
        }
        if all < need + 4.0 * pre.tol_w {
            return None;
        }
        // The first item whose weight covers what is still needed.
        let m = k + pre.w[k + 1..=n].partition_point(|x| x - pre.w[k] < need);
        if m >= n {
            return None;
        }
        let it = &self.p.items[self.order[m]];
        let still = need - (pre.w[m] - pre.w[k]);
        let err = 4.0 * (pre.tol_h + pre.h_per_w * pre.tol_w);
        Some((
            pre.h[m] - pre.h[k] + it.own_total() * still / it.weight,
            err,
        ))
    }

    /// Whether the branch from `k` at `here` hours, needing `need` weight
    /// more, cannot beat `best_h`: `here + self.cover_bound(k, need) >=
    /// best_h - EPS_H`, decided by the estimate when it is sure, else by
    /// the walk.
    fn cover_prunes(&self, k: usize, here: f64, need: f64, best_h: f64) -> bool {
        let limit = best_h - EPS_H;
        match self.cover_estimate(k, need) {
            Some((est, _)) if est == f64::INFINITY => return true,
            Some(est) => {
                if let Some(above) = surely_above(here, est, limit) {
                    return above;
                }
            }
            None => {}
        }
        here + self.cover_bound(k, need) >= limit
    }

    /// Pass 1: the largest weight within the capacity.
    fn best_weight(&mut self, k: usize, best: &mut (f64, Vec<usize>)) {
        self.nodes += 1;
        if self.nodes > NODE_LIMIT {
            self.stopped = true;
            return;
        }
        if self.weight > best.0 + EPS_W {
            *best = (self.weight, self.set.clone());
        }
        if k == self.order.len() {
            return;
        }
        let left = room(self.cap) - self.total();
        if self.bound_prunes(k, left, best.0) {
            return;
        }
        let i = self.order[k];
        self.add(i);
        if fits(&self.cost, self.cap) {
            self.best_weight(k + 1, best);
        }
        self.remove(i);
        if !self.stopped {
            self.best_weight(k + 1, best);
        }
    }

    /// The least own hours that add `need` weight from position `k` (the
    /// fractional relaxation of the covering problem, items by weight per
    /// hour): a lower bound on the hours still to spend.
    fn cover_bound(&self, k: usize, mut need: f64) -> f64 {
        if need <= EPS_W {
            return 0.0;
        }
        let mut h = 0.0;
        for &i in &self.order[k..] {
            let it = &self.p.items[i];
            if it.weight >= need {
                return h + it.own_total() * need / it.weight;
            }
            need -= it.weight;
            h += it.own_total();
        }
        f64::INFINITY
    }

    /// Pass 2: the fewest hours for at least `target` weight within the capacity.
    fn least_hours(&mut self, k: usize, target: f64, best: &mut (f64, Option<Vec<usize>>)) {
        self.nodes += 1;
        if self.nodes > NODE_LIMIT {
            self.stopped = true;
            return;
        }
        let here = self.total();
        if self.weight >= target - EPS_W {
            if here < best.0 - EPS_H {
                *best = (here, Some(self.set.clone()));
            }
            return;
        }
        if k == self.order.len() {
            return;
        }
        if self.cover_prunes(k, here, target - self.weight, best.0) {
            return;
        }
        let i = self.order[k];
        self.add(i);
        if fits(&self.cost, self.cap) {
            self.least_hours(k + 1, target, best);
        }
        self.remove(i);
        if !self.stopped {
            self.least_hours(k + 1, target, best);
        }
    }
}

/// The exact allocation: the allowed set of largest weight, then fewest hours.
pub fn allocate(p: &Problem, cap: &Capacity) -> Choice {
    allocate_from(p, cap, &[])
}

/// [`allocate`] knowing an allowed set: the weight search starts with its
/// weight as the incumbent (just under it, so that the set the search finds
/// is the one [`allocate`] finds: the first of the largest weight in the
/// search's order), pruning the branches that cannot reach it.
fn allocate_from(p: &Problem, cap: &Capacity, known: &[usize]) -> Choice {
    let mut s = Search::new(p, cap);
    let w: f64 = known.iter().map(|&i| p.items[i].weight).sum();
    let mut best = if w > 2.0 * EPS_W && fits(&p.cost(known), cap) {
        (w - 2.0 * EPS_W, known.to_vec())
    } else {
        (0.0, Vec::new())
    };
    s.best_weight(0, &mut best);
    let mut proven = !s.stopped;
    if best.0 <= 0.0 {
        return p.choice(Vec::new(), proven);
    }
    let mut s2 = Search::new(p, cap);
    let mut least = (p.cost(&best.1).iter().sum::<f64>() + EPS_H, None);
    s2.least_hours(0, best.0, &mut least);
    proven &= !s2.stopped;
    p.choice(least.1.unwrap_or(best.1), proven)
}

/// The fewest hours (and that set) for at least `weight`, without limit on
/// the hours; `None` when no set reaches it.
pub fn least_hours_for(p: &Problem, weight: f64) -> Option<Choice> {
    least_hours_below(p, weight, None)
}

/// [`least_hours_for`] knowing a set that reaches `weight`: the search
/// starts with its hours (a little over them) as the incumbent, pruning the
/// branches that cannot come under them, and falls back on that set when
/// nothing is found under them.
fn least_hours_below(p: &Problem, weight: f64, known: Option<Vec<usize>>) -> Option<Choice> {
    let cap = Capacity::Total(f64::INFINITY);
    let mut s = Search::new(p, &cap);
    let known =
        known.filter(|set| set.iter().map(|&i| p.items[i].weight).sum::<f64>() >= weight - EPS_W);
    let mut best = match &known {
        Some(set) => (p.cost(set).iter().sum::<f64>() + 4.0 * EPS_H, None),
        None => (f64::INFINITY, None),
    };
    s.least_hours(0, weight, &mut best);
    let proven = !s.stopped;
    best.1.or(known).map(|set| p.choice(set, proven))
}

/// A set that weighs more than `set`: `set` and the one item more that
/// costs least with it (None when no item adds weight).
fn one_more(p: &Problem, set: &[usize]) -> Option<Vec<usize>> {
    let mut best: Option<(f64, usize)> = None;
    for (i, it) in p.items.iter().enumerate() {
        if set.contains(&i) || !(it.weight > 0.0 && it.own_total().is_finite()) {
            continue;
        }
        let mut with: Vec<usize> = set.to_vec();
        with.push(i);
        let h: f64 = p.cost(&with).iter().sum();
        if best.is_none_or(|(bh, _)| h < bh) {
            best = Some((h, i));
        }
    }
    best.map(|(_, i)| {
        let mut with = set.to_vec();
        with.push(i);
        with
    })
}

/// One step of the goals-met curve: from `hours` on (in total), the best
/// allocation meets goals of total weight `weight`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Step {
    /// Total hours at which this weight falls in.
    pub hours: f64,
    /// Priority-weighted goals met from these hours on.
    pub weight: f64,
    /// The items of the best allocation at these hours, ascending.
    pub items: Vec<usize>,
    /// Whether both searches of the step finished.
    pub proven_optimal: bool,
}

/// The goals-met curve against total hours: the hours at which each further
/// weight falls in (the optimum is a step function of the hours; these are
/// its steps), up to every item that fits at all.
///
/// Step k + 1 is the fewest hours for more weight than step k; its weight is
/// the best allocation's at those hours (which may jump over several goals).
///
/// Each search starts from what is already known rather than from nothing:
/// the fewest-hours search from step k's set with its cheapest goal more (a
/// set past step k's weight), the largest-weight search from the set that
/// search found (it fits its own hours). An incumbent only prunes branches
/// that cannot beat it, and each is set just past the known set (by the
/// tolerances), so a finished search chooses the very set the search from
/// scratch chooses (the first best in the search's order), in fewer nodes;
/// one stopped at [`NODE_LIMIT`] keeps at least the known set.
pub fn steps(p: &Problem) -> Vec<Step> {
    let mut out: Vec<Step> = Vec::new();
    let mut w = 0.0;
    // Each step adds weight, so there are at most as many steps as items
    // when weights are equal; the guard stops a pathological case.
    for _ in 0..(4 * p.items.len() + 4) {
        // The step before and its cheapest goal more: a set past its weight,
        // the first incumbent of the fewest-hours search.
        let before = out.last().map_or(&[][..], |s| &s.items[..]);
        let Some(c) = least_hours_below(p, w + EPS_W * 10.0, one_more(p, before)) else {
            break;
        };
        // The set just found fits its own hours: the weight search starts there.
        let a = allocate_from(p, &Capacity::Total(c.hours), &c.items);
        if a.weight <= w + EPS_W {
            break;
        }
        w = a.weight;
        out.push(Step {
            hours: a.hours,
            weight: a.weight,
            proven_optimal: a.proven_optimal && c.proven_optimal,
            items: a.items,
        });
    }
    out
}

/// Every subset tried (at most 20 items): the reference the tests hold
/// [`allocate`] to. The best weight, then the fewest hours.
pub fn exhaustive(p: &Problem, cap: &Capacity) -> Choice {
    let n = p.items.len();
    assert!(n <= 20, "exhaustive search is for small programmes");
    let mut best: Option<(f64, f64, Vec<usize>)> = None;
    for mask in 0u32..(1u32 << n) {
        let set: Vec<usize> = (0..n).filter(|i| mask & (1 << i) != 0).collect();
        if set.iter().any(|&i| p.items[i].weight <= 0.0) {
            continue;
        }
        // The cost written out again, on its own.
        let mut c = vec![0.0; p.semesters];
        let mut nights: Vec<usize> = set
            .iter()
            .flat_map(|&i| p.items[i].nights.iter().copied())
            .collect();
        nights.sort_unstable();
        nights.dedup();
        for &i in &set {
            for (cs, h) in c.iter_mut().zip(&p.items[i].hours) {
                *cs += h;
            }
        }
        for n in nights {
            c[p.nights[n].semester] += p.nights[n].hours;
        }
        if !fits(&c, cap) {
            continue;
        }
        let w: f64 = set.iter().map(|&i| p.items[i].weight).sum();
        let h: f64 = c.iter().sum();
        let better = match &best {
            None => true,
            Some((bw, bh, _)) => w > bw + EPS_W || (w > bw - EPS_W && h < bh - EPS_H),
        };
        if better {
            best = Some((w, h, set));
        }
    }
    let set = best.map(|b| b.2).unwrap_or_default();
    p.choice(set, true)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn item(weight: f64, hours: f64, nights: Vec<usize>) -> Item {
        Item {
            weight,
            hours: vec![hours],
            nights,
        }
    }

    #[test]
    fn textbook_knapsack() {
        // Martello & Toth (1990), the classic small instance shape: the
        // greedy-by-ratio set is not optimal; the exact search finds 2 + 3.
        let p = Problem {
            items: vec![
                item(6.0, 1.0, vec![]),
                item(10.0, 2.0, vec![]),
                item(12.0, 3.0, vec![]),
            ],
            nights: vec![],
            semesters: 1,
        };
        let c = allocate(&p, &Capacity::Total(5.0));
        assert_eq!(c.items, vec![1, 2]);
        assert_eq!(c.weight, 22.0);
        assert!(c.proven_optimal);
    }

    #[test]
    fn a_shared_night_is_charged_once() {
        let p = Problem {
            items: vec![item(1.0, 1.0, vec![0]), item(1.0, 1.0, vec![0])],
            nights: vec![NightCost {
                semester: 0,
                hours: 0.5,
            }],
            semesters: 1,
        };
        assert_eq!(p.cost(&[0, 1]), vec![2.5]);
        let c = allocate(&p, &Capacity::Total(2.5));
        assert_eq!(c.items, vec![0, 1]);
    }
}
