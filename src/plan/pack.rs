//! The packing core of the scheduler, free of astronomy: items (possible
//! visits) with a value, a duration, the windows they must lie in and a
//! preferred start, placed on nights without overlap, within each night's
//! capacity and each target's spacing. `plan::schedule` builds a [`Problem`]
//! from the distance methods and turns the [`Placement`]s back into visits;
//! tests compare [`pack`] with the exact optimum of the same problem.
//!
//! # The problem
//!
//! Maximise the summed `value` of the placed items such that
//!
//! - at most one item of each `group` is placed (a group is one wanted visit
//!   with its alternatives on neighbouring nights);
//! - a placed item `[start, start + dur_s]` lies inside one of its `windows`;
//! - no two placed items (nor a placed item and a [`Fixed`] visit) on one night overlap;
//! - the durations placed on a night, with its fixed visits, stay within its `capacity_s`;
//! - the mid-times of two visits of one target (placed or fixed) are at least
//!   that target's `spacing_s` apart.
//!
//! Times are seconds from any common origin.
//!
//! # The rule [`pack`] follows (deterministic)
//!
//! 1. Groups are taken by their best item's value, highest first (ties:
//!    earlier preferred start, then lower group number).
//! 2. A group's items are tried in their `rank` order (its own night first);
//!    the first that has a feasible start is placed at the feasible start
//!    nearest its preferred start.
//! 3. Then every group still unplaced is tried again once the others are in
//!    place, after each placed item on its night has been moved, where its
//!    windows allow, towards the edges of the free time (left-justified, then
//!    right-justified), which can open a gap long enough for it.
//! 4. Exchanges: a group still unplaced tries each of its items in place of
//!    one placed item that stands in its way (one on the same night, or of
//!    the same target, lowest value first); the item taken out tries its own
//!    group's items again (another night, another time), and the exchange is
//!    kept when the summed value grows (a visit with no other night takes
//!    the place of one that has another). At most three passes, ending at
//!    the first that gains nothing.

/// A visit that is already fixed (done, or kept): occupies time and spacing.
#[derive(Debug, Clone, PartialEq)]
pub struct Fixed {
    /// Target index.
    pub target: usize,
    /// Night index.
    pub night: usize,
    /// Start, s.
    pub start_s: f64,
    /// End, s.
    pub end_s: f64,
}

/// One possible visit.
#[derive(Debug, Clone, PartialEq)]
pub struct Item {
    /// At most one item of a group is placed.
    pub group: usize,
    /// Order of the alternatives inside a group (0 first).
    pub rank: usize,
    /// Target index (spacing applies between visits of one target).
    pub target: usize,
    /// Night index.
    pub night: usize,
    /// Value when placed.
    pub value: f64,
    /// Duration, s.
    pub dur_s: f64,
    /// Preferred start, s.
    pub pref_s: f64,
    /// The visit must lie inside one of these, s.
    pub windows: Vec<(f64, f64)>,
}

/// A packing problem (see the module documentation).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Problem {
    /// Capacity of each night, s.
    pub capacity_s: Vec<f64>,
    /// Minimum separation of the mid-times of two visits of each target, s.
    pub spacing_s: Vec<f64>,
    /// The possible visits.
    pub items: Vec<Item>,
    /// The visits already fixed.
    pub fixed: Vec<Fixed>,
}

/// An item placed at a start.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placement {
    /// Index into `Problem::items`.
    pub item: usize,
    /// Start, s.
    pub start_s: f64,
}

/// The summed value of placements.
pub fn value(p: &Problem, sol: &[Placement]) -> f64 {
    sol.iter().map(|x| p.items[x.item].value).sum()
}

/// Why a set of placements breaks the problem's rules, if it does.
pub fn check(p: &Problem, sol: &[Placement]) -> Result<(), String> {
    const EPS: f64 = 1e-6;
    let mut groups = std::collections::BTreeSet::new();
    let mut used = vec![0.0; p.capacity_s.len()];
    for f in &p.fixed {
        used[f.night] += f.end_s - f.start_s;
    }
    // (night, target, start, end)
    let mut all: Vec<(usize, usize, f64, f64)> = p
        .fixed
        .iter()
        .map(|f| (f.night, f.target, f.start_s, f.end_s))
        .collect();
    for x in sol {
        let it = &p.items[x.item];
        if !groups.insert(it.group) {
            return Err(format!("group {} placed twice", it.group));
        }
        let end = x.start_s + it.dur_s;
        if !it
            .windows
            .iter()
            .any(|w| x.start_s >= w.0 - EPS && end <= w.1 + EPS)
        {
            return Err(format!("item {} outside its windows", x.item));
        }
        used[it.night] += it.dur_s;
        all.push((it.night, it.target, x.start_s, end));
    }
    for (n, u) in used.iter().enumerate() {
        if *u > p.capacity_s[n] + EPS {
            return Err(format!(
                "night {n} over capacity: {u} > {}",
                p.capacity_s[n]
            ));
        }
    }
    for (i, a) in all.iter().enumerate() {
        for b in &all[i + 1..] {
            if a.0 == b.0 && a.2 < b.3 - EPS && b.2 < a.3 - EPS {
                return Err(format!("visits at {} and {} overlap", a.2, b.2));
            }
            if a.1 == b.1 {
                let d = ((a.2 + a.3) / 2.0 - (b.2 + b.3) / 2.0).abs();
                if d < p.spacing_s[a.1] - EPS {
                    return Err(format!(
                        "two visits of target {} only {d} s apart (spacing {})",
                        a.1, p.spacing_s[a.1]
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Subtract the open interval `(a, b)` from a sorted list of closed
/// intervals (a closed interval may be a single start); `tmp` is scratch.
fn subtract(ivs: &mut Vec<(f64, f64)>, tmp: &mut Vec<(f64, f64)>, a: f64, b: f64) {
    if b <= a {
        return;
    }
    // Nothing to cut: the list stays as it is (no copy).
    if !ivs.iter().any(|&(x, y)| !(b <= x || a >= y)) {
        return;
    }
    tmp.clear();
    for &(x, y) in ivs.iter() {
        if b <= x || a >= y {
            tmp.push((x, y));
            continue;
        }
        // The ends of the open interval stay: a start exactly at a busy
        // visit's end (or ending exactly at its start) fits.
        if a >= x {
            tmp.push((x, a));
        }
        if b <= y {
            tmp.push((b, y));
        }
    }
    std::mem::swap(ivs, tmp);
}

/// A visit on a night: (start, end, target, `Some(item)` or `None` for a fixed visit).
type Busy = (f64, f64, usize, Option<usize>);

/// State of a packing in progress.
///
/// Every question the passes ask (the feasible starts of an item, the items
/// in the way of another) reads only the night and the target concerned, and
/// every undo puts back only the items that moved, so a pass costs in
/// proportion to the items it touches, not to the whole problem.
struct Board<'a> {
    p: &'a Problem,
    used: Vec<f64>,
    /// Per night: the visits on it.
    busy: Vec<Vec<Busy>>,
    /// Per target: mid-times of its visits.
    mids: Vec<Vec<f64>>,
    /// Per target: its placed items.
    of_target: Vec<Vec<usize>>,
    placed: Vec<Option<f64>>,
    /// Scratch for [`Board::starts`] (its answer) and [`subtract`].
    ivs: Vec<(f64, f64)>,
    tmp: Vec<(f64, f64)>,
}

impl<'a> Board<'a> {
    fn new(p: &'a Problem) -> Self {
        let mut b = Board {
            p,
            used: vec![0.0; p.capacity_s.len()],
            busy: vec![Vec::new(); p.capacity_s.len()],
            mids: vec![Vec::new(); p.spacing_s.len()],
            of_target: vec![Vec::new(); p.spacing_s.len()],
            placed: vec![None; p.items.len()],
            ivs: Vec::new(),
            tmp: Vec::new(),
        };
        for f in &p.fixed {
            b.used[f.night] += f.end_s - f.start_s;
            b.busy[f.night].push((f.start_s, f.end_s, f.target, None));
            b.mids[f.target].push((f.start_s + f.end_s) / 2.0);
        }
        b
    }

    /// Feasible starts of item `i` (closed intervals, sorted), ignoring
    /// `skip` (an item being moved), into `self.ivs`.
    fn starts(&mut self, i: usize, skip: Option<usize>) {
        let it = &self.p.items[i];
        let ivs = &mut self.ivs;
        let tmp = &mut self.tmp;
        ivs.clear();
        ivs.extend(
            it.windows
                .iter()
                .filter(|w| w.1 - w.0 >= it.dur_s)
                .map(|w| (w.0, w.1 - it.dur_s)),
        );
        ivs.sort_by(|a, b| a.0.total_cmp(&b.0));
        // The span of the starts: a busy visit that cuts nothing of it
        // leaves the list as it is ([`subtract`]'s own first test); the
        // list only shrinks, so the span found first stays a bound.
        let (lo, hi) = (
            ivs.iter().map(|v| v.0).fold(f64::INFINITY, f64::min),
            ivs.iter().map(|v| v.1).fold(f64::NEG_INFINITY, f64::max),
        );
        for &(s, e, _, who) in &self.busy[it.night] {
            if who.is_some() && who == skip {
                continue;
            }
            let (a, b) = (s - it.dur_s, e);
            if b <= lo || a >= hi {
                continue;
            }
            subtract(ivs, tmp, a, b);
        }
        let sp = self.p.spacing_s[it.target];
        if sp > 0.0 {
            let half = it.dur_s / 2.0;
            let skip_mid =
                skip.and_then(|k| self.placed[k].map(|s| s + self.p.items[k].dur_s / 2.0));
            let mut skipped = false;
            for &m in &self.mids[it.target] {
                if !skipped && skip_mid == Some(m) {
                    skipped = true;
                    continue;
                }
                let (a, b) = (m - sp - half, m + sp - half);
                if b <= lo || a >= hi {
                    continue;
                }
                subtract(ivs, tmp, a, b);
            }
        }
    }

    fn fits_capacity(&self, i: usize, skip: Option<usize>) -> bool {
        let it = &self.p.items[i];
        let freed = skip.map_or(0.0, |k| self.p.items[k].dur_s);
        self.used[it.night] - freed + it.dur_s <= self.p.capacity_s[it.night] + 1e-6
    }

    /// The feasible start nearest `target_s`.
    fn nearest(&mut self, i: usize, target_s: f64, skip: Option<usize>) -> Option<f64> {
        if !self.fits_capacity(i, skip) {
            return None;
        }
        self.starts(i, skip);
        let mut best: Option<(f64, f64)> = None;
        for &(a, b) in &self.ivs {
            let s = target_s.clamp(a, b);
            let d = (s - target_s).abs();
            if best.is_none_or(|(bd, _)| d < bd) {
                best = Some((d, s));
            }
        }
        best.map(|b| b.1)
    }

    fn put(&mut self, i: usize, s: f64) {
        let it = &self.p.items[i];
        self.used[it.night] += it.dur_s;
        self.busy[it.night].push((s, s + it.dur_s, it.target, Some(i)));
        self.mids[it.target].push(s + it.dur_s / 2.0);
        self.of_target[it.target].push(i);
        self.placed[i] = Some(s);
    }

    fn take(&mut self, i: usize) {
        let it = &self.p.items[i];
        let Some(s) = self.placed[i].take() else {
            return;
        };
        self.used[it.night] -= it.dur_s;
        if let Some(k) = self.busy[it.night].iter().position(|b| b.3 == Some(i)) {
            self.busy[it.night].remove(k);
        }
        let m = s + it.dur_s / 2.0;
        if let Some(k) = self.mids[it.target].iter().position(|x| *x == m) {
            self.mids[it.target].remove(k);
        }
        if let Some(k) = self.of_target[it.target].iter().position(|&x| x == i) {
            self.of_target[it.target].remove(k);
        }
    }

    /// The placed items of `night` with their starts (the state
    /// [`Board::put_back`] restores after [`Board::justify`]).
    fn on_night(&self, night: usize, out: &mut Vec<(f64, usize)>) {
        out.clear();
        out.extend(
            self.busy[night]
                .iter()
                .filter_map(|b| b.3.map(|i| (b.0, i))),
        );
    }

    /// Put the items of `saved` (from [`Board::on_night`]) back at their starts.
    fn put_back(&mut self, saved: &[(f64, usize)]) {
        let moved = |b: &Board, &(s, i): &(f64, usize)| b.placed[i] != Some(s);
        for x in saved {
            if moved(self, x) {
                self.take(x.1);
            }
        }
        for &(s, i) in saved {
            if self.placed[i].is_none() {
                self.put(i, s);
            }
        }
    }

    /// Move every placed item of `night` as far towards `left` (or right)
    /// as its windows and neighbours allow, in order, so free time gathers
    /// at the other end and between windows.
    fn justify(&mut self, night: usize, left: bool, on: &mut Vec<(f64, usize)>) {
        self.on_night(night, on);
        on.sort_by(|a, b| a.0.total_cmp(&b.0));
        if !left {
            on.reverse();
        }
        for &(_, i) in on.iter() {
            let Some(s0) = self.placed[i] else { continue };
            // The far end, on the side asked, of the free run the item sits in.
            self.starts(i, Some(i));
            let near = self
                .ivs
                .iter()
                .find(|(a, b)| *a <= s0 + 1e-9 && s0 <= *b + 1e-9)
                .map(|&(a, b)| if left { a } else { b });
            if let Some(s) = near {
                self.take(i);
                self.put(i, s);
            }
        }
    }
}

/// Passes of the exchange step at most (each pass that gains nothing ends it).
const EXCHANGE_PASSES: usize = 3;

/// The exchange step of [`pack`]: every group still unplaced tries each of
/// its items in place of one placed item that stands in its way (on its
/// night, or of its target), which then tries its own group's items again;
/// the exchange is kept when the summed value grows.
fn exchange(p: &Problem, groups: &[(usize, Vec<usize>)], board: &mut Board) {
    let mut group_of = vec![usize::MAX; p.items.len()];
    for (gi, (_, items)) in groups.iter().enumerate() {
        for &i in items {
            group_of[i] = gi;
        }
    }
    let mut blockers: Vec<usize> = Vec::new();
    for _ in 0..EXCHANGE_PASSES {
        let mut gained = false;
        for (_, items) in groups {
            if items.iter().any(|&i| board.placed[i].is_some()) {
                continue;
            }
            'alts: for &i in items {
                let it = &p.items[i];
                if it.value <= 0.0 {
                    continue;
                }
                // The placed items on its night or of its target.
                blockers.clear();
                blockers.extend(board.busy[it.night].iter().filter_map(|b| b.3));
                blockers.extend(
                    board.of_target[it.target]
                        .iter()
                        .copied()
                        .filter(|&k| p.items[k].night != it.night),
                );
                blockers.sort_by(|a, b| {
                    p.items[*a]
                        .value
                        .total_cmp(&p.items[*b].value)
                        .then(a.cmp(b))
                });
                for &k in &blockers {
                    let Some(k_start) = board.placed[k] else {
                        continue;
                    };
                    board.take(k);
                    let Some(s) = board.nearest(i, it.pref_s, None) else {
                        board.put(k, k_start);
                        continue;
                    };
                    board.put(i, s);
                    // The group taken out tries its items again.
                    let mut again = None;
                    for &j in &groups[group_of[k]].1 {
                        if p.items[j].value > 0.0
                            && let Some(s) = board.nearest(j, p.items[j].pref_s, None)
                        {
                            board.put(j, s);
                            again = Some(j);
                            break;
                        }
                    }
                    let gain =
                        it.value + again.map_or(0.0, |j| p.items[j].value) - p.items[k].value;
                    if gain > 1e-9 {
                        gained = true;
                        break 'alts;
                    }
                    if let Some(j) = again {
                        board.take(j);
                    }
                    board.take(i);
                    board.put(k, k_start);
                }
            }
        }
        if !gained {
            break;
        }
    }
}

/// Pack a problem by the rule in the module documentation.
pub fn pack(p: &Problem) -> Vec<Placement> {
    let mut by_group: std::collections::BTreeMap<usize, Vec<usize>> = Default::default();
    for (i, it) in p.items.iter().enumerate() {
        by_group.entry(it.group).or_default().push(i);
    }
    let mut groups: Vec<(usize, Vec<usize>)> = by_group.into_iter().collect();
    for (_, items) in groups.iter_mut() {
        items.sort_by_key(|&i| (p.items[i].rank, i));
    }
    let key = |items: &Vec<usize>| {
        let best = items
            .iter()
            .map(|&i| p.items[i].value)
            .fold(f64::NEG_INFINITY, f64::max);
        let pref = items.first().map(|&i| p.items[i].pref_s).unwrap_or(0.0);
        (best, pref)
    };
    groups.sort_by(|a, b| {
        let (va, pa) = key(&a.1);
        let (vb, pb) = key(&b.1);
        vb.total_cmp(&va)
            .then(pa.total_cmp(&pb))
            .then(a.0.cmp(&b.0))
    });
    let mut board = Board::new(p);
    let mut open: Vec<usize> = Vec::new();
    for (gi, (_, items)) in groups.iter().enumerate() {
        let mut done = false;
        for &i in items {
            if p.items[i].value <= 0.0 {
                continue;
            }
            if let Some(s) = board.nearest(i, p.items[i].pref_s, None) {
                board.put(i, s);
                done = true;
                break;
            }
        }
        if !done {
            open.push(gi);
        }
    }
    // Second pass: justify the nights an open group could use and try again.
    let (mut saved, mut on) = (Vec::new(), Vec::new());
    for gi in open {
        let items = &groups[gi].1;
        'alts: for &i in items {
            if p.items[i].value <= 0.0 || !board.fits_capacity(i, None) {
                continue;
            }
            let night = p.items[i].night;
            for left in [true, false] {
                // Justifying moves only the items of this night.
                board.on_night(night, &mut saved);
                board.justify(night, left, &mut on);
                if let Some(s) = board.nearest(i, p.items[i].pref_s, None) {
                    board.put(i, s);
                    break 'alts;
                }
                // Put the night back as it was.
                board.put_back(&saved);
            }
        }
    }
    // Third pass: exchanges (see the module documentation).
    exchange(p, &groups, &mut board);
    let mut out: Vec<Placement> = board
        .placed
        .iter()
        .enumerate()
        .filter_map(|(i, s)| {
            s.map(|s| Placement {
                item: i,
                start_s: s,
            })
        })
        .collect();
    out.sort_by(|a, b| a.start_s.total_cmp(&b.start_s).then(a.item.cmp(&b.item)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn item(group: usize, target: usize, value: f64, dur: f64, pref: f64, w: (f64, f64)) -> Item {
        Item {
            group,
            rank: 0,
            target,
            night: 0,
            value,
            dur_s: dur,
            pref_s: pref,
            windows: vec![w],
        }
    }

    #[test]
    fn spacing_keeps_two_visits_of_a_target_apart() {
        let p = Problem {
            capacity_s: vec![10_000.0],
            spacing_s: vec![3600.0],
            items: vec![
                item(0, 0, 1.0, 600.0, 1000.0, (0.0, 9000.0)),
                item(1, 0, 1.0, 600.0, 1100.0, (0.0, 9000.0)),
            ],
            fixed: vec![],
        };
        let sol = pack(&p);
        check(&p, &sol).unwrap();
        assert_eq!(sol.len(), 2);
        let mids: Vec<f64> = sol.iter().map(|x| x.start_s + 300.0).collect();
        assert!((mids[1] - mids[0]).abs() >= 3600.0);
    }

    #[test]
    fn justifying_opens_a_gap_for_a_long_visit() {
        // Two short visits preferred in the middle of a 3000 s window leave
        // no 1800 s gap; moving them to one side does.
        let p = Problem {
            capacity_s: vec![10_000.0],
            spacing_s: vec![0.0; 3],
            items: vec![
                item(0, 0, 3.0, 500.0, 1000.0, (0.0, 3000.0)),
                item(1, 1, 2.0, 500.0, 1600.0, (0.0, 3000.0)),
                item(2, 2, 1.0, 1800.0, 0.0, (0.0, 3000.0)),
            ],
            fixed: vec![],
        };
        let sol = pack(&p);
        check(&p, &sol).unwrap();
        assert_eq!(value(&p, &sol), 6.0);
    }

    #[test]
    fn capacity_and_fixed_visits_are_respected() {
        let p = Problem {
            capacity_s: vec![1000.0],
            spacing_s: vec![0.0; 2],
            items: vec![
                item(0, 0, 1.0, 600.0, 0.0, (0.0, 5000.0)),
                item(1, 1, 1.0, 300.0, 0.0, (0.0, 5000.0)),
            ],
            fixed: vec![Fixed {
                target: 1,
                night: 0,
                start_s: 0.0,
                end_s: 500.0,
            }],
        };
        let sol = pack(&p);
        check(&p, &sol).unwrap();
        assert_eq!(sol.len(), 1);
        assert_eq!(sol[0].item, 1);
        assert!(sol[0].start_s >= 500.0);
    }
}
