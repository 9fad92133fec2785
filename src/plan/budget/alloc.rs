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
//! Depth-first branch and bound, items in order of weight per own hour, the
//! item taken before it is left out (Martello & Toth, *Knapsack Problems*,
//! 1990, ch. 2, from memory). It runs in two passes: the largest weight
//! within the hours, then the fewest hours that still give that weight (a
//! covering search). A branch is pruned when a bound shows it cannot beat
//! the incumbent; the bounds are tried cheapest first, and each is valid on
//! its own, so the search is exact:
//!
//! 1. Dantzig's fractional relaxation over the items' own hours (a set's
//!    true cost is at least the sum of its items' own hours: calibrations
//!    only add).
//! 2. Shares of the calibrations: each undecided item is charged, besides
//!    its own hours, k_n / min(d_n, m) for each of its nights not yet used,
//!    d_n the night's undecided users and m the most items a set can still
//!    take within the hours. Over any set the shares sum to at most the
//!    calibrations it adds (a night adds k_n once and has at most
//!    min(d_n, m) users in the set), so the fractional relaxation over
//!    these costs is a bound.
//! 3. The linear relaxation of the whole problem, calibrations included.
//!    For a slope θ ≥ 0, the set B of undecided items that minimises
//!    cost(B) − θ·weight(B) is a closure problem (an item needs its
//!    nights), solved as a minimum cut (Picard 1976; the maximum flow by
//!    Dinic's method; Ahuja, Magnanti & Orlin, *Network Flows*, 1993,
//!    ch. 7 and 19; all from memory). Each θ gives a Lagrangian bound (for
//!    the covering search θ·need + min_B (cost(B) − θ·weight(B)); for the
//!    weight search weight(B) + (room − cost(B)) / θ), and the θ walked
//!    along the lower convex hull of the points (weight(B), cost(B)) reach
//!    the relaxation's value. On the budget's programmes (goals of a few
//!    priorities whose calibrations are as large as their own hours) this
//!    relaxation is nearly always the optimum or within a fraction of a goal
//!    of it, where the first two bounds leave the search exponential.
//!
//! With whole weights (priorities) the weight still needed is rounded up,
//! and the weight still reachable down. A set found by a cut that beats the
//! incumbent is kept as a witness: the branches whose decisions agree with
//! it cannot be pruned, and get no bound. A bound removes only branches
//! that hold no set better than the incumbent, so the sets chosen are the
//! ones the search without these bounds chooses (the first best in the
//! search's order), in fewer nodes. A search that passes [`NODE_LIMIT`]
//! nodes stops with the best set found and says it is not proven optimal.
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

/// A maximum flow by Dinic's method (blocking flows along shortest paths;
/// Dinic 1970, as in Ahuja, Magnanti & Orlin, *Network Flows*, 1993, ch. 7,
/// from memory), on the small graph of [`Search::closure`]: used only for
/// its minimum cut. Each node's arcs are a list through `Arc::next`, the
/// last added first; an arc and its reverse are neighbours (`e ^ 1`).
#[derive(Default)]
struct Flow {
    head: Vec<u32>,
    arcs: Vec<Arc>,
    level: Vec<i32>,
    it: Vec<u32>,
    queue: Vec<u32>,
}

/// An arc of [`Flow`]: its head node, the next arc out of its tail, and
/// its residual capacity (kept together: the searches read all three).
#[derive(Clone, Copy)]
struct Arc {
    to: u32,
    next: u32,
    cap: f64,
}

const NONE: usize = usize::MAX;
/// The end of a node's list of arcs.
const NO_ARC: u32 = u32::MAX;

impl Flow {
    fn reset(&mut self, nodes: usize) {
        self.head.clear();
        self.head.resize(nodes, NO_ARC);
        self.arcs.clear();
    }

    fn edge(&mut self, a: usize, b: usize, c: f64) {
        for (x, y, c) in [(a, b, c), (b, a, 0.0)] {
            self.arcs.push(Arc {
                to: y as u32,
                next: self.head[x],
                cap: c,
            });
            self.head[x] = (self.arcs.len() - 1) as u32;
        }
    }

    /// Breadth-first levels from `s` over edges with room; whether `t` is reached.
    fn levels(&mut self, s: usize, t: usize) -> bool {
        self.level.clear();
        self.level.resize(self.head.len(), -1);
        self.queue.clear();
        self.level[s] = 0;
        self.queue.push(s as u32);
        let mut q = 0;
        while q < self.queue.len() {
            let v = self.queue[q] as usize;
            q += 1;
            let lv = self.level[v] + 1;
            let mut e = self.head[v];
            while e != NO_ARC {
                let a = self.arcs[e as usize];
                let u = a.to as usize;
                if a.cap > FLOW_EPS && self.level[u] < 0 {
                    self.level[u] = lv;
                    if u == t {
                        // The nodes not yet labelled lie no nearer the
                        // source than `t`: no shortest path to `t` passes
                        // them, so the blocking flow is the same without
                        // them (and the last search, which misses `t`,
                        // labels every node it reaches).
                        return true;
                    }
                    self.queue.push(a.to);
                }
                e = a.next;
            }
        }
        self.level[t] >= 0
    }

    fn push(&mut self, v: usize, t: usize, f: f64) -> f64 {
        if v == t {
            return f;
        }
        let lv = self.level[v] + 1;
        while self.it[v] != NO_ARC {
            let e = self.it[v] as usize;
            let a = self.arcs[e];
            let u = a.to as usize;
            if a.cap > FLOW_EPS && self.level[u] == lv {
                let d = self.push(u, t, f.min(a.cap));
                if d > FLOW_EPS {
                    self.arcs[e].cap -= d;
                    self.arcs[e ^ 1].cap += d;
                    return d;
                }
            }
            self.it[v] = a.next;
        }
        0.0
    }

    /// Saturate; afterwards `level[v] >= 0` marks the source side of a minimum cut.
    fn run(&mut self, s: usize, t: usize) {
        while self.levels(s, t) {
            self.it.clear();
            self.it.extend_from_slice(&self.head);
            while self.push(s, t, f64::INFINITY) > FLOW_EPS {}
        }
    }
}

/// Residual capacity below which an edge counts as saturated.
const FLOW_EPS: f64 = 1e-12;

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
    /// For each night, how many items still undecided (from the current
    /// position of `order` on) use it.
    avail: Vec<u32>,
    /// Work space of the share bounds: (cost, weight) of the undecided items.
    buf: Vec<(f64, f64)>,
    /// Work space of the closure bounds.
    flow: Flow,
    node_of_night: Vec<usize>,
    /// Candidates of a cut (item, profit), its users by night, and its set.
    cand: Vec<(usize, f64)>,
    /// Whether each candidate of the cut is linked to no night node.
    lone: Vec<bool>,
    users: Vec<u32>,
    cut: Vec<usize>,
    /// Each item's own hours ([`Item::own_total`], summed once).
    own: Vec<f64>,
    /// Whether every weight is a whole number (sums of them are then
    /// whole, and exact in floating point).
    whole: bool,
    /// The least weight of the items from each position of `order` on.
    wmin: Vec<f64>,
    /// Whether each item is in the set so far.
    in_set: Vec<bool>,
    /// A set known to beat the incumbent (a witness): the branches whose
    /// decisions agree with it cannot be pruned, and need no bound.
    witness: Option<Witness>,
    /// The slope of the last relaxation walked, where the next walk starts.
    theta: f64,
}

/// A set that beats the incumbent: its items (by item index) and its
/// weight and hours.
struct Witness {
    member: Vec<bool>,
    weight: f64,
    hours: f64,
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
        let mut avail = vec![0u32; p.nights.len()];
        for &i in &order {
            for &n in &p.items[i].nights {
                avail[n] += 1;
            }
        }
        Search {
            pre,
            avail,
            buf: Vec::with_capacity(order.len()),
            flow: Flow::default(),
            node_of_night: vec![NONE; p.nights.len()],
            cand: Vec::new(),
            lone: Vec::new(),
            own: p.items.iter().map(Item::own_total).collect(),
            users: vec![0; p.nights.len()],
            cut: Vec::new(),
            whole: order
                .iter()
                .all(|&i| p.items[i].weight.fract() == 0.0 && p.items[i].weight < 1e15),
            in_set: vec![false; p.items.len()],
            witness: None,
            theta: 0.0,
            wmin: {
                let mut m = vec![f64::INFINITY; order.len() + 1];
                for j in (0..order.len()).rev() {
                    m[j] = m[j + 1].min(p.items[order[j]].weight);
                }
                m
            },
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
        self.in_set[i] = true;
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
        self.in_set[i] = false;
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

    /// The search moves past item `i` (taken or not): its nights lose an
    /// undecided user.
    fn pass(&mut self, i: usize) {
        for &n in &self.p.items[i].nights {
            self.avail[n] -= 1;
        }
    }

    fn unpass(&mut self, i: usize) {
        for &n in &self.p.items[i].nights {
            self.avail[n] += 1;
        }
    }

    /// The undecided items' costs with their share of the nights not yet
    /// used: own hours plus k_n / min(d_n, m) for each such night, d_n its
    /// undecided users, m the most items a set may still take. Over any set
    /// B of at most m undecided items the shares sum to at most the
    /// calibrations B adds (a night adds k_n once and has at most
    /// min(d_n, m) users in B), so these costs summed over B are a lower
    /// bound on what B adds. Into `self.buf`, (cost, weight).
    fn share_costs(&mut self, k: usize, m: u32) {
        self.buf.clear();
        for &i in &self.order[k..] {
            let it = &self.p.items[i];
            let mut c = self.own[i];
            for &n in &it.nights {
                if self.night_use[n] == 0 {
                    c += self.p.nights[n].hours / self.avail[n].min(m).max(1) as f64;
                }
            }
            self.buf.push((c, it.weight));
        }
    }

    /// The most undecided items whose share costs (with `m`) sum to at most
    /// `room`: a bound on the size of any set that adds at most `room`.
    fn most_items(&mut self, k: usize, m: u32, room: f64) -> u32 {
        self.share_costs(k, m);
        self.buf.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        let mut sum = 0.0;
        let mut count = 0u32;
        for &(c, _) in &self.buf {
            sum += c;
            if sum > room {
                break;
            }
            count += 1;
        }
        count
    }

    /// Shares with the size bound, tightened twice.
    fn tight_shares(&mut self, k: usize, room: f64) {
        let mut m = u32::MAX;
        for _ in 0..3 {
            let m2 = self.most_items(k, m, room);
            if m2 >= m {
                break;
            }
            m = m2;
        }
        self.share_costs(k, m);
    }

    /// Whether no set of undecided items adds weight more than `best_w -
    /// self.weight + EPS_W` within `room` hours more (Dantzig's bound over the share costs).
    fn share_bound_prunes(&mut self, k: usize, room: f64, best_w: f64) -> bool {
        let room = room.max(0.0) * (1.0 + 1e-12) + 1e-12;
        self.tight_shares(k, room);
        self.buf
            .sort_unstable_by(|a, b| (b.1 * a.0).total_cmp(&(a.1 * b.0)));
        let mut left = room;
        let mut w = 0.0;
        for &(c, wi) in &self.buf {
            if c <= left {
                left -= c;
                w += wi;
            } else {
                w += wi * left / c;
                break;
            }
        }
        self.weight + self.whole_below(w * (1.0 + 1e-12)) <= best_w + EPS_W
    }

    /// Whether no set of undecided items adds `need` weight in fewer than
    /// `room` hours more (the fractional cover over the share costs).
    fn share_cover_prunes(&mut self, k: usize, need: f64, room: f64) -> bool {
        if need <= EPS_W {
            return false;
        }
        if room <= 0.0 {
            return true;
        }
        let room = room * (1.0 + 1e-12) + 1e-12;
        self.tight_shares(k, room);
        self.buf
            .sort_unstable_by(|a, b| (b.1 * a.0).total_cmp(&(a.1 * b.0)));
        let mut need = need;
        let mut h = 0.0;
        for &(c, wi) in &self.buf {
            if wi >= need {
                h += c * need / wi;
                return h * (1.0 - 1e-12) >= room;
            }
            need -= wi;
            h += c;
        }
        true
    }

    /// The set B of undecided items (from position `k`) that minimises
    /// cost(B) - theta * weight(B), cost(B) the hours B adds to the set so
    /// far (own hours and the calibrations of nights not yet used): the
    /// closure problem of selecting items that need nights, solved as a
    /// minimum cut (Picard 1976; Ahuja, Magnanti & Orlin 1993, ch. 19, from
    /// memory). An item of no profit (theta * weight below its own hours
    /// and the nights no other candidate uses) never lowers the sum and is
    /// left out of the graph. B goes to `self.cut`; returns its (weight,
    /// added hours), both summed from B itself.
    fn closure(&mut self, k: usize, theta: f64) -> (f64, f64) {
        let p = self.p;
        // Candidates: items of positive profit before their nights.
        self.cand.clear();
        for &i in &self.order[k..] {
            let it = &p.items[i];
            let profit = theta * it.weight - self.own[i];
            if profit > 0.0 {
                self.cand.push((i, profit));
                for &n in &it.nights {
                    if self.night_use[n] == 0 {
                        self.users[n] += 1;
                    }
                }
            }
        }
        // A night of one candidate is that candidate's own cost.
        for c in self.cand.iter_mut() {
            for &n in &p.items[c.0].nights {
                if self.night_use[n] == 0 && self.users[n] == 1 {
                    c.1 -= p.nights[n].hours;
                }
            }
        }
        let (src, sink) = (0usize, 1usize);
        let mut nodes = 2 + self.cand.len();
        for c in &self.cand {
            for &n in &p.items[c.0].nights {
                if self.night_use[n] == 0 && self.users[n] > 1 && self.node_of_night[n] == NONE {
                    self.node_of_night[n] = nodes;
                    nodes += 1;
                }
            }
        }
        self.flow.reset(nodes);
        // A candidate without a night node (a lone one) gets no edge: no
        // path to the sink passes it, so the flow and the other nodes'
        // levels are the same without it, and it is on the source side
        // exactly when its edge from the source would have room.
        self.lone.clear();
        let mut linked = false;
        for (j, c) in self.cand.iter().enumerate() {
            let lone = c.1 <= 0.0
                || p.items[c.0]
                    .nights
                    .iter()
                    .all(|&n| self.node_of_night[n] == NONE);
            self.lone.push(lone);
            if lone {
                continue;
            }
            linked = true;
            self.flow.edge(src, 2 + j, c.1);
            for &n in &p.items[c.0].nights {
                let v = self.node_of_night[n];
                if v != NONE {
                    self.flow.edge(2 + j, v, f64::INFINITY);
                }
            }
        }
        if linked {
            for c in &self.cand {
                for &n in &p.items[c.0].nights {
                    let v = self.node_of_night[n];
                    if v != NONE && v < nodes {
                        // Each night's edge once: its node moved out of range marks it done.
                        self.flow.edge(v, sink, p.nights[n].hours);
                        self.node_of_night[n] = NONE - v;
                    }
                }
            }
            self.flow.run(src, sink);
        }
        // The source side's items, and the hours they add.
        self.cut.clear();
        let (mut w, mut c) = (0.0, 0.0);
        for (j, cd) in self.cand.iter().enumerate() {
            let inside = if self.lone[j] {
                cd.1 > FLOW_EPS
            } else {
                self.flow.level[2 + j] >= 0
            };
            if inside {
                self.cut.push(cd.0);
                w += p.items[cd.0].weight;
                c += self.own[cd.0];
            }
        }
        for &i in &self.cut {
            for &n in &p.items[i].nights {
                if self.night_use[n] == 0 && self.users[n] != u32::MAX {
                    self.users[n] = u32::MAX;
                    c += p.nights[n].hours;
                }
            }
        }
        for cd in &self.cand {
            for &n in &p.items[cd.0].nights {
                self.users[n] = 0;
                self.node_of_night[n] = NONE;
            }
        }
        (w, c)
    }

    /// The undecided items' weight and added hours all taken.
    fn all_undecided(&mut self, k: usize) -> (f64, f64) {
        let (mut w, mut c) = (0.0, 0.0);
        let p = self.p;
        for &i in &self.order[k..] {
            let it = &p.items[i];
            w += it.weight;
            c += self.own[i];
            for &n in &it.nights {
                if self.night_use[n] == 0 && self.node_of_night[n] == NONE {
                    self.node_of_night[n] = 0;
                    c += p.nights[n].hours;
                }
            }
        }
        for &i in &self.order[k..] {
            for &n in &p.items[i].nights {
                self.node_of_night[n] = NONE;
            }
        }
        (w, c)
    }

    /// Whether no set of undecided items adds `need` weight in fewer than
    /// `room` hours more: the linear relaxation of the covering problem,
    /// whose value is the lower convex hull of the points (weight(B),
    /// cost(B)) at `need`, walked by minimum cuts (each slope theta gives
    /// the bound theta * need + min_B (cost(B) - theta * weight(B)), a
    /// Lagrangian bound, valid for any theta >= 0).
    fn closure_cover_prunes(&mut self, k: usize, need: f64, room: f64) -> bool {
        if need <= EPS_W {
            return false;
        }
        if room <= 0.0 {
            return true;
        }
        let margin = 1e-9 * (1.0 + room.abs());
        let (mut lo, mut hi) = ((0.0, 0.0), self.all_undecided(k));
        if hi.0 < need - EPS_W {
            return true;
        }
        if self.theta > 0.0 {
            // The last walk's slope first: often it decides at once.
            let theta = self.theta;
            let b = self.closure(k, theta);
            if b.1 + theta * (need - b.0) - margin >= room {
                return true;
            }
            if b.0 >= need - EPS_W {
                if b.1 < room - margin && self.witness_from_cut() {
                    return false;
                }
                hi = b;
            } else {
                lo = b;
            }
        }
        for _ in 0..40 {
            if hi.0 - lo.0 <= EPS_W {
                return false;
            }
            let theta = (hi.1 - lo.1) / (hi.0 - lo.0);
            // The hull between lo and hi, at need: no bound can pass it.
            if lo.1 + theta * (need - lo.0) < room + margin {
                return false;
            }
            self.theta = theta;
            let b = self.closure(k, theta);
            if b.1 + theta * (need - b.0) - margin >= room {
                return true;
            }
            if b.0 >= need - EPS_W && b.1 < room - margin && self.witness_from_cut() {
                return false;
            }
            if b.1 - theta * b.0 >= lo.1 - theta * lo.0 - margin {
                return false;
            }
            if b.0 >= need - EPS_W {
                hi = b;
            } else {
                lo = b;
            }
        }
        false
    }

    /// Whether no set of undecided items within `room` hours more adds
    /// weight more than `best_w - self.weight + EPS_W`: the linear
    /// relaxation as in [`Self::closure_cover_prunes`] (each slope theta > 0
    /// bounds the weight by weight(B) + (room - cost(B)) / theta).
    fn closure_bound_prunes(&mut self, k: usize, room: f64, best_w: f64) -> bool {
        let want = best_w + EPS_W - self.weight;
        let room = room.max(0.0);
        let (mut lo, mut hi) = ((0.0, 0.0), self.all_undecided(k));
        if hi.1 <= room {
            return hi.0 <= want;
        }
        let margin = 1e-9 * (1.0 + want.abs());
        if self.theta > 0.0 {
            // The last walk's slope first: often it decides at once.
            let theta = self.theta;
            let b = self.closure(k, theta);
            if self.whole_below(b.0 + (room - b.1) / theta + margin) <= want {
                return true;
            }
            if b.1 <= room {
                if b.0 > want + margin && b.1 < room - EPS_H - margin && self.witness_from_cut() {
                    return false;
                }
                lo = b;
            } else {
                hi = b;
            }
        }
        for _ in 0..40 {
            if hi.1 - lo.1 <= 0.0 || hi.0 - lo.0 <= 0.0 {
                return false;
            }
            let theta = (hi.1 - lo.1) / (hi.0 - lo.0);
            if theta <= 0.0 {
                return false;
            }
            // The hull between lo and hi meets the room at no more than
            // the relaxation's weight: past `want`, no bound can prune.
            if self.whole_below(lo.0 + (room - lo.1) / theta) > want + margin {
                return false;
            }
            self.theta = theta;
            let b = self.closure(k, theta);
            if self.whole_below(b.0 + (room - b.1) / theta + margin) <= want {
                return true;
            }
            if b.1 <= room - EPS_H - margin && b.0 > want + margin && self.witness_from_cut() {
                return false;
            }
            if b.1 - theta * b.0 >= lo.1 - theta * lo.0 - 1e-9 * (1.0 + room) {
                return false;
            }
            if b.1 <= room {
                lo = b;
            } else {
                hi = b;
            }
        }
        false
    }

    /// Whether the witness agrees with every decision so far (the items
    /// before position `k`) and still beats the incumbent: weight over
    /// `best_w` (pass 1) or hours under `best_h` (pass 2).
    fn witnessed(&self, k: usize, best_w: Option<f64>, best_h: Option<f64>) -> bool {
        let Some(w) = &self.witness else {
            return false;
        };
        if best_w.is_some_and(|b| w.weight <= b + EPS_W)
            || best_h.is_some_and(|b| w.hours >= b - EPS_H)
        {
            return false;
        }
        self.order[..k]
            .iter()
            .all(|&i| self.in_set[i] == w.member[i])
    }

    /// The set so far and the undecided items of the last minimum cut, as a
    /// witness when it fits.
    fn witness_from_cut(&mut self) -> bool {
        let mut member = self.in_set.clone();
        for &i in &self.cut {
            member[i] = true;
        }
        let set: Vec<usize> = (0..member.len()).filter(|&i| member[i]).collect();
        let c = self.p.cost(&set);
        if !fits(&c, self.cap) {
            return false;
        }
        self.witness = Some(Witness {
            weight: set.iter().map(|&i| self.p.items[i].weight).sum(),
            hours: c.iter().sum(),
            member,
        });
        true
    }

    /// The weight a set of undecided items (from `k`) must add to reach
    /// `target` (within EPS_W, as [`Self::least_hours`] counts it): at
    /// least one item's, and with whole weights the next whole number.
    fn need(&self, k: usize, target: f64) -> f64 {
        let need = target - EPS_W - self.weight;
        if need <= 0.0 {
            return 0.0;
        }
        let need = need.max(self.wmin[k]);
        if self.whole { need.ceil() } else { need }
    }

    /// Weight a set of undecided items may add at most, from a relaxation's
    /// `ub`: with whole weights the whole number below it.
    fn whole_below(&self, ub: f64) -> f64 {
        if self.whole {
            (ub + 1e-9 * (1.0 + ub.abs())).floor()
        } else {
            ub
        }
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
        // A set fits with EPS_H over each semester's hours.
        let slack = EPS_H * self.p.semesters.max(1) as f64;
        // A witness (a set beyond this branch beats the incumbent): no
        // bound prunes the branch, none is computed.
        if !self.witnessed(k, Some(best.0), None)
            && (self.share_bound_prunes(k, left + slack, best.0)
                || self.closure_bound_prunes(k, left + slack, best.0))
        {
            return;
        }
        let i = self.order[k];
        self.pass(i);
        self.add(i);
        if fits(&self.cost, self.cap) {
            self.best_weight(k + 1, best);
        }
        self.remove(i);
        if !self.stopped {
            self.best_weight(k + 1, best);
        }
        self.unpass(i);
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
        let need = self.need(k, target);
        let room = best.0 - EPS_H - here;
        if !self.witnessed(k, None, Some(best.0))
            && (self.share_cover_prunes(k, need, room) || self.closure_cover_prunes(k, need, room))
        {
            return;
        }
        let i = self.order[k];
        self.pass(i);
        self.add(i);
        if fits(&self.cost, self.cap) {
            self.least_hours(k + 1, target, best);
        }
        self.remove(i);
        if !self.stopped {
            self.least_hours(k + 1, target, best);
        }
        self.unpass(i);
    }
}

/// The allocation: the allowed set of largest weight, then fewest hours;
/// exact up to [`EXACT_CURVE_ITEMS`] items, above them [`allocate_bounded`]
/// (marked not proven).
pub fn allocate(p: &Problem, cap: &Capacity) -> Choice {
    allocate_with(p, cap, p.items.len() > EXACT_CURVE_ITEMS)
}

/// [`allocate`] of a problem whose goals-met curve ([`steps`]) is already
/// known: a large programme's allocation starts from it instead of
/// finding it again.
pub fn allocate_along(p: &Problem, cap: &Capacity, curve: &[Step]) -> Choice {
    if p.items.len() > EXACT_CURVE_ITEMS {
        allocate_bounded(p, cap, curve)
    } else {
        allocate_from(p, cap, &[])
    }
}

/// [`allocate`], exact or (`bounded`) by [`allocate_bounded`] whatever the
/// programme's size (the tests hold both to the exhaustive optimum).
pub fn allocate_with(p: &Problem, cap: &Capacity, bounded: bool) -> Choice {
    if bounded {
        let curve = match cap {
            Capacity::Total(_) => steps_with(p, true),
            Capacity::PerSemester(_) => Vec::new(),
        };
        allocate_bounded(p, cap, &curve)
    } else {
        allocate_from(p, cap, &[])
    }
}

/// The allocation of a large programme, in work that grows with the items
/// (the exact search's nodes each solve a minimum cut over every undecided
/// item, and at a thousand goals it does not finish): with hours in total,
/// the best step of the bounded goals-met curve `curve` ([`steps_with`])
/// within the hours; then, from it and from nothing, the goals that still fit added one
/// at a time, the one of fewest added hours per unit weight first (in every
/// semester's hours, when asked per semester). The best of these sets,
/// marked not proven.
pub fn allocate_bounded(p: &Problem, cap: &Capacity, curve: &[Step]) -> Choice {
    let pool: Vec<usize> = eligible(p)
        .into_iter()
        .filter(|&i| fits(&p.cost(&[i]), cap))
        .collect();
    let nights = distinct_nights(p);
    let mut starts: Vec<Vec<usize>> = vec![Vec::new()];
    if let Capacity::Total(h) = cap
        && let Some(s) = curve
            .iter()
            .rev()
            .find(|s| s.hours <= h + EPS_H && fits(&p.cost(&s.items), cap))
    {
        starts.push(s.items.clone());
    }
    let mut best: Option<(f64, f64, Vec<usize>)> = None;
    for start in starts {
        let set = fill(p, &nights, cap, &pool, start);
        let w: f64 = set.iter().map(|&i| p.items[i].weight).sum();
        let h: f64 = p.cost(&set).iter().sum();
        if best
            .as_ref()
            .is_none_or(|(bw, bh, _)| w > bw + EPS_W || (w > bw - EPS_W && h < bh - EPS_H))
        {
            best = Some((w, h, set));
        }
    }
    p.choice(best.map(|b| b.2).unwrap_or_default(), false)
}

/// `set` with the items of `pool` that still fit the capacity added one at
/// a time, fewest added hours (own and new nights' calibrations, in total)
/// per unit weight first, ties to the lower index.
fn fill(
    p: &Problem,
    nights: &[Vec<usize>],
    cap: &Capacity,
    pool: &[usize],
    set: Vec<usize>,
) -> Vec<usize> {
    let mut g = Greedy::new(p, nights, &set);
    loop {
        let mut pick: Option<(f64, usize)> = None;
        for &i in pool {
            if g.inside[i] || !fits(&g.cost_with(i), cap) {
                continue;
            }
            let v = g.delta(i) / p.items[i].weight;
            if pick.is_none_or(|(b, _)| v < b) {
                pick = Some((v, i));
            }
        }
        let Some((_, i)) = pick else { break };
        g.toggle(i);
    }
    g.set()
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
    /// A lower bound on the fewest hours that give this weight: `hours`
    /// itself for a proven step; otherwise the lower convex hull of the
    /// points (weight(B), cost(B)) at this weight (see [`hull`]), so the
    /// fewest hours lie between this and `hours`.
    pub hours_at_least: f64,
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
///
/// The steps run in stretches side by side, between the corners of the
/// lower convex hull of the points (weight(B), cost(B)) (see [`hull`]): a
/// corner's set is the fewest-hours set for its weight, so the curve has a
/// step at each corner's weight, and the stretch from one corner on needs
/// only that corner's set to start. Each stretch is then checked against
/// the one before it: it is kept only when the stretch before ended on that
/// corner's weight with that very set, which is what its first step would
/// have started from in one sequence; from the first stretch that fails the
/// check on, the steps are taken one after the other as before. Each step is
/// a function of the step before it alone, so the curve is, bit for bit, the
/// one the single sequence gives.
///
/// Above [`EXACT_CURVE_ITEMS`] items the exact searches between corners grow
/// far faster than the items, and the curve comes from [`steps_bounded`]
/// instead: the corners exact, the steps between them found by greedy
/// searches, each marked not proven and given the hull's lower bound.
pub fn steps(p: &Problem) -> Vec<Step> {
    steps_with(p, p.items.len() > EXACT_CURVE_ITEMS)
}

/// [`steps`], exact or (`bounded`) by [`steps_bounded`] whatever the
/// programme's size (the tests hold the bounded curve to the exhaustive
/// optimum on small programmes).
pub fn steps_with(p: &Problem, bounded: bool) -> Vec<Step> {
    let corners = hull(p);
    let mut out = if bounded {
        steps_bounded(p, &corners)
    } else {
        steps_exact(p, &corners)
    };
    // A step stopped at the node limit keeps its set; the hull bounds its hours.
    if out.iter().any(|s| !s.proven_optimal) {
        let points = hull_points(p, &corners);
        for s in out.iter_mut().filter(|s| !s.proven_optimal) {
            s.hours_at_least = envelope(&points, s.weight).min(s.hours);
        }
    }
    out
}

/// Items above which [`steps`] gives the bounded curve of [`steps_bounded`]
/// rather than the exact one (the budget's 1,000-target synthetic programme
/// has 116 goals; its exact curve takes about 20 s of CPU, and at 1,069
/// goals, 10,000 targets, the exact curve did not finish in 15 minutes).
pub const EXACT_CURVE_ITEMS: usize = 400;

fn steps_exact(p: &Problem, corners: &[Corner]) -> Vec<Step> {
    use rayon::prelude::*;
    let max_steps = 4 * p.items.len() + 4;
    let starts: Vec<(f64, Vec<usize>)> = std::iter::once((0.0, Vec::new()))
        .chain(corners.iter().map(|c| (c.weight, c.items.clone())))
        .collect();
    let stretches: Vec<Vec<Step>> = (0..starts.len())
        .into_par_iter()
        .map(|j| {
            let (w, before) = &starts[j];
            let until = starts.get(j + 1).map(|s| s.0);
            stretch(p, *w, before, until, max_steps)
        })
        .collect();
    let mut out: Vec<Step> = Vec::new();
    let n = stretches.len();
    for (j, st) in stretches.into_iter().enumerate() {
        if j > 0 {
            let joins = out
                .last()
                .is_some_and(|l| l.weight == starts[j].0 && l.items == starts[j].1);
            if !joins {
                break;
            }
        }
        // The last stretch ran to the end of the curve.
        let whole = j + 1 == n || st.last().is_some_and(|l| l.weight == starts[j + 1].0);
        out.extend(st);
        if j + 1 == n {
            out.truncate(max_steps);
            return out;
        }
        if !whole {
            break;
        }
    }
    // From the first stretch that did not join, the sequence from the last
    // step kept.
    let more = match out.last() {
        Some(last) => stretch(p, last.weight, &last.items, None, max_steps),
        None => stretch(p, 0.0, &[], None, max_steps),
    };
    out.extend(more);
    out.truncate(max_steps);
    out
}

/// The same curve as [`steps`], its steps taken one after the other from
/// the start (no stretches side by side): the reference the tests hold
/// [`steps`] to, bit for bit.
pub fn steps_one_by_one(p: &Problem) -> Vec<Step> {
    stretch(p, 0.0, &[], None, 4 * p.items.len() + 4)
}

/// The steps after weight `w` whose set was `before`, one after the other,
/// until one reaches `until` (or none adds weight), at most `max_steps`.
///
/// Each step's fewest-hours search also settles the step before's weight
/// search, most of the time: step k's set c (the fewest hours for more
/// weight than step k − 1) is the best allocation at its own hours unless
/// a heavier set fits them too, and the next fewest-hours search (more
/// weight than c, from c and its cheapest goal more, the very search the
/// next step starts with) finds the fewest hours of any heavier set. When
/// those lie clearly above c's hours (by more than the searches'
/// tolerances), nothing heavier fits c's hours and the weight search at
/// them (which starts from c, just under its weight) ends on c's weight,
/// where its fewest-hours pass keeps c: the step is c, and the next
/// search's answer is the next step's first search. Otherwise (a heavier
/// set within a hair of c's hours, a search stopped at [`NODE_LIMIT`]) the
/// weight search runs as before. The tests hold the curve to the searches
/// from scratch, bit for bit, ties included.
fn stretch(
    p: &Problem,
    mut w: f64,
    before: &[usize],
    until: Option<f64>,
    max_steps: usize,
) -> Vec<Step> {
    let mut out: Vec<Step> = Vec::new();
    // The fewest-hours search of the step to come, when the step before
    // already ran it (None: not yet run; Some(None): it found no set).
    let mut ahead: Option<Option<Choice>> = None;
    for _ in 0..max_steps {
        if until.is_some_and(|u| w >= u) {
            break;
        }
        // The step before and its cheapest goal more: a set past its weight,
        // the first incumbent of the fewest-hours search.
        let before = out.last().map_or(before, |s| &s.items[..]);
        let found = match ahead.take() {
            Some(c) => c,
            None => least_hours_below(p, w + EPS_W * 10.0, one_more(p, before)),
        };
        let Some(c) = found else {
            break;
        };
        // The search after this step's, were the step c itself.
        let next = least_hours_below(p, c.weight + EPS_W * 10.0, one_more(p, &c.items));
        let heavier_clear = match &next {
            None => true,
            Some(n) => n.proven_optimal && n.hours > c.hours + 4.0 * EPS_H,
        };
        let a = if heavier_clear && c.proven_optimal {
            ahead = Some(next);
            c.clone()
        } else {
            // The set just found fits its own hours: the weight search starts there.
            let a = allocate_from(p, &Capacity::Total(c.hours), &c.items);
            if a.items == c.items {
                ahead = Some(next);
            }
            a
        };
        if a.weight <= w + EPS_W {
            break;
        }
        w = a.weight;
        out.push(Step {
            hours: a.hours,
            weight: a.weight,
            proven_optimal: a.proven_optimal && c.proven_optimal,
            hours_at_least: a.hours,
            items: a.items,
        });
    }
    out
}

/// A corner of the lower convex hull of the points (weight(B), cost(B))
/// over the sets B of items: the set (ascending) and its weight.
#[derive(Debug, Clone, PartialEq)]
pub struct Corner {
    /// Total weight of the set.
    pub weight: f64,
    /// The set, ascending.
    pub items: Vec<usize>,
}

/// The corners of the lower convex hull of (weight(B), cost(B)), strictly
/// between the empty set and the last corner of largest weight, ascending
/// by weight. Each is a set B minimising cost(B) − θ·weight(B) for some
/// θ > 0 (a minimum cut, as in the closure bounds), so no set of more
/// weight costs as little: B is the fewest-hours set for its weight. Found
/// by splitting each hull edge at the slope between its ends until no cut
/// lies below it (the parametric search of Eisner & Severance 1976, from
/// memory).
pub fn hull(p: &Problem) -> Vec<Corner> {
    let cap = Capacity::Total(f64::INFINITY);
    let mut s = Search::new(p, &cap);
    if s.order.is_empty() {
        return Vec::new();
    }
    let top = s.all_undecided(0);
    let mut corners: Vec<(f64, f64, Vec<usize>)> = Vec::new();
    let mut edges = vec![((0.0, 0.0), top)];
    while let Some((lo, hi)) = edges.pop() {
        if hi.0 - lo.0 <= EPS_W || corners.len() > 4 * p.items.len() {
            continue;
        }
        let theta = (hi.1 - lo.1) / (hi.0 - lo.0);
        if !(theta > 0.0 && theta.is_finite()) {
            continue;
        }
        let b = s.closure(0, theta);
        let margin = 1e-9 * (1.0 + hi.1.abs());
        if b.1 - theta * b.0 < lo.1 - theta * lo.0 - margin
            && b.0 > lo.0 + EPS_W
            && b.0 < hi.0 - EPS_W
        {
            let mut items = s.cut.clone();
            items.sort_unstable();
            corners.push((b.0, b.1, items));
            edges.push((lo, b));
            edges.push((b, hi));
        }
    }
    corners.sort_by(|a, b| a.0.total_cmp(&b.0));
    corners.dedup_by(|a, b| a.0 == b.0);
    corners
        .into_iter()
        .map(|(weight, _, items)| Corner { weight, items })
        .collect()
}

/// The lower convex hull of the points (weight(B), cost(B)) as its
/// vertices: the empty set, the corners, and the set of every item that can
/// be met (see [`hull`]).
pub fn hull_points(p: &Problem, corners: &[Corner]) -> Vec<(f64, f64)> {
    let top = eligible(p);
    std::iter::once((0.0, 0.0))
        .chain(
            corners
                .iter()
                .map(|c| (c.weight, p.cost(&c.items).iter().sum::<f64>())),
        )
        .chain(std::iter::once((
            top.iter().map(|&i| p.items[i].weight).sum(),
            p.cost(&top).iter().sum(),
        )))
        .collect()
}

/// The hull of [`hull_points`] at weight `w`: no set of weight `w` or more
/// costs less (the hull rises all the way). Infinite past the largest weight.
pub fn envelope(points: &[(f64, f64)], w: f64) -> f64 {
    if w <= 0.0 {
        return 0.0;
    }
    for k in 1..points.len() {
        let ((w0, c0), (w1, c1)) = (points[k - 1], points[k]);
        if w <= w1 + EPS_W {
            if w1 - w0 <= EPS_W {
                return c1;
            }
            return c0 + (c1 - c0) * ((w - w0) / (w1 - w0)).clamp(0.0, 1.0);
        }
    }
    f64::INFINITY
}

/// The items that can be met at all (weight above zero, finite hours), ascending.
fn eligible(p: &Problem) -> Vec<usize> {
    (0..p.items.len())
        .filter(|&i| p.items[i].weight > 0.0 && p.items[i].own_total().is_finite())
        .collect()
}

/// A set being grown or shrunk one item at a time, with each night's users
/// counted, so an item's hours with it (its own and the calibrations of the
/// nights it alone uses) cost one pass over its nights.
struct Greedy<'a> {
    p: &'a Problem,
    /// Each item's nights, each once ([`distinct_nights`]).
    nights: &'a [Vec<usize>],
    users: Vec<u32>,
    inside: Vec<bool>,
    weight: f64,
    /// The set's hours by semester, as [`Problem::cost`] counts them.
    cost: Vec<f64>,
}

/// Each item's nights, each once.
fn distinct_nights(p: &Problem) -> Vec<Vec<usize>> {
    p.items
        .iter()
        .map(|it| {
            let mut n = it.nights.clone();
            n.sort_unstable();
            n.dedup();
            n
        })
        .collect()
}

impl<'a> Greedy<'a> {
    fn new(p: &'a Problem, nights: &'a [Vec<usize>], set: &[usize]) -> Self {
        let mut g = Greedy {
            p,
            nights,
            users: vec![0; p.nights.len()],
            inside: vec![false; p.items.len()],
            weight: 0.0,
            cost: vec![0.0; p.semesters],
        };
        for &i in set {
            g.toggle(i);
        }
        g
    }
    /// The set's hours by semester with item `i` (outside) added.
    fn cost_with(&self, i: usize) -> Vec<f64> {
        let mut c = self.cost.clone();
        for (s, h) in self.p.items[i].hours.iter().enumerate() {
            c[s] += h;
        }
        for &n in &self.nights[i] {
            if self.users[n] == 0 {
                c[self.p.nights[n].semester] += self.p.nights[n].hours;
            }
        }
        c
    }
    /// The hours item `i` adds (outside) or saves (inside).
    fn delta(&self, i: usize) -> f64 {
        let alone = if self.inside[i] { 1 } else { 0 };
        self.p.items[i].own_total()
            + self.nights[i]
                .iter()
                .filter(|&&n| self.users[n] == alone)
                .map(|&n| self.p.nights[n].hours)
                .sum::<f64>()
    }
    fn toggle(&mut self, i: usize) {
        let (p, sign) = (self.p, if self.inside[i] { -1.0 } else { 1.0 });
        if self.inside[i] {
            for &n in &self.nights[i] {
                self.users[n] -= 1;
            }
        }
        // A night's calibration comes with its first user and goes with its last.
        for &n in &self.nights[i] {
            if self.users[n] == 0 {
                self.cost[p.nights[n].semester] += sign * p.nights[n].hours;
            }
        }
        if !self.inside[i] {
            for &n in &self.nights[i] {
                self.users[n] += 1;
            }
        }
        for (s, h) in p.items[i].hours.iter().enumerate() {
            self.cost[s] += sign * h;
        }
        self.inside[i] = !self.inside[i];
        self.weight += sign * p.items[i].weight;
    }
    fn set(&self) -> Vec<usize> {
        (0..self.p.items.len())
            .filter(|&i| self.inside[i])
            .collect()
    }
    /// From the set, items added (`up`) or removed one at a time, each time
    /// the one of least added hours (or most saved), per unit weight when
    /// `per_weight`, ties to the lower index; every set on the way, until
    /// the weight passes `until` (up) or falls to it.
    fn walk(mut self, pool: &[usize], up: bool, per_weight: bool, until: f64) -> Vec<Vec<usize>> {
        let mut out = Vec::new();
        loop {
            if (up && self.weight >= until - EPS_W) || (!up && self.weight <= until + EPS_W) {
                break;
            }
            let mut best: Option<(f64, usize)> = None;
            for &i in pool {
                if self.inside[i] == up {
                    continue;
                }
                let d = self.delta(i);
                let v = if per_weight {
                    d / self.p.items[i].weight
                } else {
                    d
                };
                let v = if up { v } else { -v };
                if best.is_none_or(|(b, _)| v < b) {
                    best = Some((v, i));
                }
            }
            let Some((_, i)) = best else { break };
            self.toggle(i);
            out.push(self.set());
        }
        out
    }
}

/// The goals-met curve of a large programme, in work that grows with the
/// items rather than exponentially: the hull's corners (each exact: the
/// fewest hours for its weight, and nothing weighs more for as little), and
/// between two corners the sets met on greedy walks, up from the lower
/// corner (adding the item of fewest hours with it, or fewest per unit
/// weight) and down from the upper one (removing the item that saves most
/// hours, or most per unit weight). Of all these sets the curve keeps those
/// that weigh more than every set of no more hours: the steps of the best
/// allocation known at each number of hours. The steps between corners are
/// marked not proven; [`steps`] gives each the hull's lower bound.
pub fn steps_bounded(p: &Problem, corners: &[Corner]) -> Vec<Step> {
    use rayon::prelude::*;
    let pool = eligible(p);
    if pool.is_empty() {
        return Vec::new();
    }
    let nights = distinct_nights(p);
    let top: (f64, Vec<usize>) = (pool.iter().map(|&i| p.items[i].weight).sum(), pool.clone());
    let ends: Vec<(f64, Vec<usize>)> = std::iter::once((0.0, Vec::new()))
        .chain(corners.iter().map(|c| (c.weight, c.items.clone())))
        .chain(std::iter::once(top))
        .collect();
    // (set, proven): the corners and the top (the one set of the largest
    // weight), then every walk's sets.
    let mut found: Vec<(Vec<usize>, bool)> =
        ends[1..].iter().map(|(_, s)| (s.clone(), true)).collect();
    let walked: Vec<Vec<Vec<usize>>> = (0..ends.len() - 1)
        .into_par_iter()
        .flat_map_iter(|j| {
            let ((wa, a), (wb, b)) = (&ends[j], &ends[j + 1]);
            let (pool, nights) = (&pool, &nights);
            [(true, false), (true, true), (false, false), (false, true)]
                .into_iter()
                .map(move |(up, per_weight)| {
                    if up {
                        Greedy::new(p, nights, a).walk(pool, true, per_weight, *wb)
                    } else {
                        Greedy::new(p, nights, b).walk(pool, false, per_weight, *wa)
                    }
                })
        })
        .collect();
    found.extend(walked.into_iter().flatten().map(|s| (s, false)));
    // Each set's hours and weight; the best known weight at each number of hours.
    let mut sets: Vec<(f64, f64, bool, Vec<usize>)> = found
        .into_iter()
        .filter(|(s, _)| !s.is_empty())
        .map(|(s, proven)| {
            let h: f64 = p.cost(&s).iter().sum();
            let w: f64 = s.iter().map(|&i| p.items[i].weight).sum();
            (h, w, proven, s)
        })
        .collect();
    sets.sort_by(|x, y| {
        x.0.total_cmp(&y.0)
            .then(y.1.total_cmp(&x.1))
            .then(y.2.cmp(&x.2))
            .then(x.3.cmp(&y.3))
    });
    let mut out: Vec<Step> = Vec::new();
    for (hours, weight, proven, items) in sets {
        if out.last().is_some_and(|l| weight <= l.weight + EPS_W) {
            continue;
        }
        out.push(Step {
            hours,
            weight,
            items,
            proven_optimal: proven,
            hours_at_least: hours,
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

    use crate::test_rng::Rng;

    #[test]
    fn closure_is_the_least_of_cost_less_theta_weight_over_every_set() {
        // Random programmes with nights shared by several items, by one
        // (a lone candidate's own cost) and by none, some already used by
        // decided items: the cut's set must reach the least
        // cost(B) - theta * weight(B) over every set B of undecided items
        // (to 1e-9 of the hours), and its weight and hours must be its own.
        let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
        for _ in 0..300 {
            let n_items = 2 + rng.below(9) as usize;
            let n_nights = 1 + rng.below(8) as usize;
            let nights: Vec<NightCost> = (0..n_nights)
                .map(|_| NightCost {
                    semester: 0,
                    hours: 0.1 + 2.0 * rng.unit(),
                })
                .collect();
            let items: Vec<Item> = (0..n_items)
                .map(|_| {
                    let k = rng.below(4) as usize;
                    item(
                        1.0 + rng.below(4) as f64,
                        0.05 + 3.0 * rng.unit(),
                        (0..k)
                            .map(|_| rng.below(n_nights as u64) as usize)
                            .collect(),
                    )
                })
                .collect();
            let p = Problem {
                items,
                nights,
                semesters: 1,
            };
            let cap = Capacity::Total(f64::INFINITY);
            let mut s = Search::new(&p, &cap);
            let k = rng.below(s.order.len() as u64 / 2 + 1) as usize;
            for j in 0..k {
                let i = s.order[j];
                s.pass(i);
                if rng.below(2) == 0 {
                    s.add(i);
                }
            }
            let theta = 0.2 + 4.0 * rng.unit();
            let (w, c) = s.closure(k, theta);
            let cut = s.cut.clone();
            let undecided: Vec<usize> = s.order[k..].to_vec();
            let added = |b: &[usize]| {
                let mut with = s.set.clone();
                with.extend_from_slice(b);
                p.cost(&with)[0] - s.total()
            };
            let cut_w: f64 = cut.iter().map(|&i| p.items[i].weight).sum();
            assert!((w - cut_w).abs() < 1e-9, "{w} {cut_w}");
            assert!((c - added(&cut)).abs() < 1e-9, "{c} {}", added(&cut));
            let mut least = f64::INFINITY;
            for mask in 0u32..(1 << undecided.len()) {
                let b: Vec<usize> = (0..undecided.len())
                    .filter(|j| mask & (1 << j) != 0)
                    .map(|j| undecided[j])
                    .collect();
                let bw: f64 = b.iter().map(|&i| p.items[i].weight).sum();
                least = least.min(added(&b) - theta * bw);
            }
            assert!(
                (c - theta * w - least).abs() < 1e-9,
                "cut {cut:?}: {} against {least}",
                c - theta * w
            );
        }
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
