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

/// The closed intervals left of the sorted closed intervals `wins` (a
/// closed interval may be a single start) once the open intervals `cuts`
/// (sorted by their start; empty ones left out) are taken away, into `out`,
/// in order. The ends of an open interval stay: a start exactly at a busy
/// visit's end (or ending exactly at its start) fits.
///
/// What is left of a window is a closed set; its pieces are its connected
/// parts, so the answer does not depend on the order the cuts are taken in:
/// one sweep over the cuts sorted by start gives what subtracting them one
/// by one from a copy of the list gives (the test
/// `sweep_equals_cutting_one_by_one` compares the two), without the copies.
fn free_starts(wins: &[(f64, f64)], cuts: &[(f64, f64)], out: &mut Vec<(f64, f64)>) {
    out.clear();
    for &(x, y) in wins {
        // The start of the piece being grown (closed).
        let mut cur = x;
        let mut alive = true;
        for &(a, b) in cuts {
            if b <= cur {
                continue;
            }
            if a >= y {
                // The cuts are sorted by start: none after this one reaches in.
                break;
            }
            if a >= cur {
                out.push((cur, a));
            }
            cur = b;
            if cur > y {
                alive = false;
                break;
            }
        }
        if alive {
            out.push((cur, y));
        }
    }
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
    /// Per night: the visits on it, sorted by start (so the cuts they make
    /// in an item's starts come sorted, for [`free_starts`]).
    busy: Vec<Vec<Busy>>,
    /// Per target: mid-times of its visits, sorted.
    mids: Vec<Vec<f64>>,
    /// Per target: its placed items.
    of_target: Vec<Vec<usize>>,
    placed: Vec<Option<f64>>,
    /// [`Board::starts`]'s answer, and its scratch (the windows' starts, the cuts).
    ivs: Vec<(f64, f64)>,
    wins: Vec<(f64, f64)>,
    cuts: Vec<(f64, f64)>,
    /// [`Board::gather`]'s cuts of one item, each with what it belongs to,
    /// and that item while they hold: every put and take forgets it (they
    /// are the only moves of visits and mid-times).
    tagged: Vec<(f64, f64, Cut)>,
    gathered: Option<usize>,
}

/// What a cut in an item's starts belongs to: a visit on its night (the
/// item placed there, `None` for a fixed visit), or one of its target's
/// mid-times (the spacing).
#[derive(Clone, Copy)]
enum Cut {
    Visit(Option<usize>),
    Mid(f64),
}

/// Insert `x` into the sorted `v` after the elements equal to it.
fn insert_sorted<T>(v: &mut Vec<T>, x: T, key: impl Fn(&T) -> f64) {
    let k = key(&x);
    let at = v.partition_point(|y| key(y).total_cmp(&k).is_le());
    v.insert(at, x);
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
            wins: Vec::new(),
            cuts: Vec::new(),
            tagged: Vec::new(),
            gathered: None,
        };
        for f in &p.fixed {
            b.used[f.night] += f.end_s - f.start_s;
            insert_sorted(
                &mut b.busy[f.night],
                (f.start_s, f.end_s, f.target, None),
                |x| x.0,
            );
            insert_sorted(&mut b.mids[f.target], (f.start_s + f.end_s) / 2.0, |m| *m);
        }
        b
    }

    /// Feasible starts of item `i` (closed intervals, sorted), ignoring
    /// `skip` (an item being moved), into `self.ivs`.
    fn starts(&mut self, i: usize, skip: Option<usize>) {
        if self.gathered != Some(i) {
            self.gather(i);
        }
        self.sweep(i, skip);
    }

    /// Item `i`'s windows (as starts) and every cut that reaches into them:
    /// the visits on its night and, with a spacing, its target's mid-times,
    /// each with what it belongs to, sorted by start, into `self.wins` and
    /// `self.tagged`. What [`Board::sweep`] leaves out of them depends only
    /// on the item skipped, so they serve every question about the item
    /// until a visit moves ([`Board::starts`] gathers them again only then):
    /// the exchange tries an item against every blocker with one gathering.
    fn gather(&mut self, i: usize) {
        self.gathered = Some(i);
        let it = &self.p.items[i];
        let wins = &mut self.wins;
        let cuts = &mut self.tagged;
        wins.clear();
        wins.extend(
            it.windows
                .iter()
                .filter(|w| w.1 - w.0 >= it.dur_s)
                .map(|w| (w.0, w.1 - it.dur_s)),
        );
        wins.sort_by(|a, b| a.0.total_cmp(&b.0));
        // The span of the starts: a cut outside it cuts nothing.
        let (lo, hi) = (
            wins.iter().map(|v| v.0).fold(f64::INFINITY, f64::min),
            wins.iter().map(|v| v.1).fold(f64::NEG_INFINITY, f64::max),
        );
        // The busy visits sorted by start give their cuts sorted by start.
        cuts.clear();
        for &(s, e, _, who) in &self.busy[it.night] {
            let (a, b) = (s - it.dur_s, e);
            if b <= a || b <= lo || a >= hi {
                continue;
            }
            cuts.push((a, b, Cut::Visit(who)));
        }
        let sp = self.p.spacing_s[it.target];
        if sp > 0.0 {
            let n_busy = cuts.len();
            let half = it.dur_s / 2.0;
            for &m in &self.mids[it.target] {
                let (a, b) = (m - sp - half, m + sp - half);
                if b <= a || b <= lo || a >= hi {
                    continue;
                }
                cuts.push((a, b, Cut::Mid(m)));
            }
            if cuts.len() > n_busy && n_busy > 0 {
                // Ties in start give the same sweep in either order.
                cuts.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
            }
        }
    }

    /// The feasible starts of item `i` from its gathered cuts
    /// ([`Board::gather`]), ignoring `skip` (an item being moved: its visit
    /// and, among its own target's, one mid-time equal to its own), into
    /// `self.ivs`.
    fn sweep(&mut self, i: usize, skip: Option<usize>) {
        let it = &self.p.items[i];
        // The skipped item's mid-time counts only among its own target's.
        let skip_mid = skip
            .filter(|&k| self.p.items[k].target == it.target)
            .and_then(|k| self.placed[k].map(|s| s + self.p.items[k].dur_s / 2.0));
        let mut skipped = false;
        self.cuts.clear();
        for &(a, b, tag) in &self.tagged {
            match tag {
                Cut::Visit(Some(w)) if Some(w) == skip => continue,
                Cut::Mid(m) if !skipped && skip_mid == Some(m) => {
                    skipped = true;
                    continue;
                }
                _ => self.cuts.push((a, b)),
            }
        }
        free_starts(&self.wins, &self.cuts, &mut self.ivs);
    }

    fn fits_capacity(&self, i: usize, skip: Option<usize>) -> bool {
        let it = &self.p.items[i];
        let freed = skip.map_or(0.0, |k| self.p.items[k].dur_s);
        self.used[it.night] - freed + it.dur_s <= self.p.capacity_s[it.night] + 1e-6
    }

    /// The use of the night of placed item `k` as taking `k` out and putting
    /// it back would leave it (the same two sums, so the same bits), without
    /// the moves: the order of a night's visits, a target's mid-times and
    /// its placed items changes no answer (they are sorted, or sets).
    fn round_trip_use(&mut self, k: usize) {
        let (night, dur_s) = (self.p.items[k].night, self.p.items[k].dur_s);
        self.used[night] = (self.used[night] - dur_s) + dur_s;
    }

    /// The feasible start nearest `target_s`.
    fn nearest(&mut self, i: usize, target_s: f64, skip: Option<usize>) -> Option<f64> {
        if !self.fits_capacity(i, skip) {
            return None;
        }
        self.starts(i, skip);
        self.nearest_start(target_s)
    }

    /// Where [`Board::nearest`] would put item `i` once the placed item `k`
    /// is taken out, without taking it out: the capacity of `i`'s night
    /// with `k`'s time freed when they share it (the same sum as after the
    /// take), and the starts with `k`'s visit and, for its own target, its
    /// mid-time left out.
    fn nearest_without(&mut self, i: usize, target_s: f64, k: usize) -> Option<f64> {
        let same_night = self.p.items[k].night == self.p.items[i].night;
        if !self.fits_capacity(i, same_night.then_some(k)) {
            return None;
        }
        self.starts(i, Some(k));
        self.nearest_start(target_s)
    }

    /// The start in `self.ivs` nearest `target_s` (the first of equals).
    fn nearest_start(&self, target_s: f64) -> Option<f64> {
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
        self.gathered = None;
        let it = &self.p.items[i];
        self.used[it.night] += it.dur_s;
        insert_sorted(
            &mut self.busy[it.night],
            (s, s + it.dur_s, it.target, Some(i)),
            |b| b.0,
        );
        insert_sorted(&mut self.mids[it.target], s + it.dur_s / 2.0, |m| *m);
        self.of_target[it.target].push(i);
        self.placed[i] = Some(s);
    }

    fn take(&mut self, i: usize) {
        let it = &self.p.items[i];
        let Some(s) = self.placed[i].take() else {
            return;
        };
        self.gathered = None;
        self.used[it.night] -= it.dur_s;
        let busy = &mut self.busy[it.night];
        let from = busy.partition_point(|b| b.0.total_cmp(&s).is_lt());
        if let Some(k) = busy[from..].iter().position(|b| b.3 == Some(i)) {
            busy.remove(from + k);
        }
        let m = s + it.dur_s / 2.0;
        let mids = &mut self.mids[it.target];
        let from = mids.partition_point(|x| *x < m);
        if mids.get(from) == Some(&m) {
            mids.remove(from);
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
    // With their values beside them, so the sort reads no item.
    let mut blockers: Vec<(f64, usize)> = Vec::new();
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
                let value_of = |k: usize| (p.items[k].value, k);
                blockers.extend(
                    board.busy[it.night]
                        .iter()
                        .filter_map(|b| b.3)
                        .map(value_of),
                );
                blockers.extend(
                    board.of_target[it.target]
                        .iter()
                        .copied()
                        .filter(|&k| p.items[k].night != it.night)
                        .map(value_of),
                );
                // Lowest value first, then lower index (each item once, so
                // the order is total and an unstable sort gives it).
                blockers.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
                for &(_, k) in &blockers {
                    let Some(k_start) = board.placed[k] else {
                        continue;
                    };
                    // Where `i` would go with `k` out (its night's capacity
                    // first), asked before moving anything: most trials end
                    // here, and then the board is left as taking `k` out and
                    // back would leave it.
                    let Some(s) = board.nearest_without(i, it.pref_s, k) else {
                        board.round_trip_use(k);
                        continue;
                    };
                    board.take(k);
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

    use crate::test_rng::Rng;

    /// The free starts the slow way: a copy of the list per cut, the cut
    /// taken from every piece it overlaps (the packer's method before the
    /// sweep of [`free_starts`]).
    fn subtract(ivs: &mut Vec<(f64, f64)>, a: f64, b: f64) {
        if b <= a {
            return;
        }
        let mut out = Vec::new();
        for &(x, y) in ivs.iter() {
            if b <= x || a >= y {
                out.push((x, y));
                continue;
            }
            if a >= x {
                out.push((x, a));
            }
            if b <= y {
                out.push((b, y));
            }
        }
        *ivs = out;
    }

    #[test]
    fn sweep_equals_cutting_one_by_one() {
        // Whole numbers on a short range, so cuts often share ends with
        // each other and with the windows (the single-start pieces).
        let mut r = Rng(0x9e37_79b9_7f4a_7c15);
        for _ in 0..20_000 {
            let mut wins = Vec::new();
            let mut x = r.below(10) as f64;
            for _ in 0..1 + r.below(3) {
                let y = x + r.below(20) as f64;
                wins.push((x, y));
                x = y + 1.0 + r.below(5) as f64;
            }
            let cuts: Vec<(f64, f64)> = (0..r.below(12))
                .map(|_| {
                    let a = r.below(60) as f64 - 5.0;
                    (a, a + r.below(12) as f64)
                })
                .collect();
            let mut want = wins.clone();
            for &(a, b) in &cuts {
                subtract(&mut want, a, b);
            }
            let mut sorted: Vec<(f64, f64)> = cuts.into_iter().filter(|c| c.1 > c.0).collect();
            sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
            let mut got = Vec::new();
            free_starts(&wins, &sorted, &mut got);
            assert_eq!(got, want, "windows {wins:?} cuts {sorted:?}");
        }
    }

    /// A problem of a few nights, targets and items on a grid of 100 s, with
    /// fixed visits, tight capacities and spacings.
    fn random_problem(r: &mut Rng) -> Problem {
        let nights = 1 + r.below(3) as usize;
        let targets = 1 + r.below(4) as usize;
        let mut items = Vec::new();
        for g in 0..4 + r.below(20) as usize {
            for rank in 0..1 + r.below(3) as usize {
                let night = r.below(nights as u64) as usize;
                let base = night as f64 * 100_000.0;
                let w0 = base + 100.0 * r.below(40) as f64;
                let w1 = w0 + 100.0 * (1 + r.below(40)) as f64;
                let w2 = w1 + 100.0 * (1 + r.below(10)) as f64;
                let w3 = w2 + 100.0 * r.below(30) as f64;
                items.push(Item {
                    group: g,
                    rank,
                    target: r.below(targets as u64) as usize,
                    night,
                    value: 1.0 + r.below(4) as f64 / 2.0,
                    dur_s: 100.0 * (1 + r.below(8)) as f64,
                    pref_s: w0 + 100.0 * r.below(50) as f64,
                    windows: vec![(w0, w1), (w2, w3)],
                });
            }
        }
        let capacity_s: Vec<f64> = (0..nights)
            .map(|_| 100.0 * (5 + r.below(30)) as f64)
            .collect();
        // At most one fixed visit a night, within its capacity (fixed visits
        // are taken as they are, so they must keep the rules themselves).
        let mut fixed = Vec::new();
        for night in 0..nights {
            if r.below(2) == 0 {
                let s = night as f64 * 100_000.0 + 100.0 * r.below(60) as f64;
                fixed.push(Fixed {
                    target: r.below(targets as u64) as usize,
                    night,
                    start_s: s,
                    end_s: s + 100.0 * (1 + r.below(5)) as f64,
                });
            }
        }
        Problem {
            capacity_s,
            spacing_s: (0..targets).map(|_| 100.0 * r.below(20) as f64).collect(),
            items,
            fixed,
        }
    }

    #[test]
    fn board_starts_equal_cutting_everything_afresh() {
        // After any puts and takes, an item's starts (with or without an
        // item skipped) are its windows cut by every visit on its night and
        // every mid-time of its target, one by one, in the order they came.
        let mut r = Rng(0x2545_f491_4f6c_dd1d);
        for _ in 0..300 {
            let p = random_problem(&mut r);
            let mut board = Board::new(&p);
            // The visits as placed, in the order they came: (item or none, night, target, start, end).
            let mut log: Vec<(Option<usize>, usize, usize, f64, f64)> = p
                .fixed
                .iter()
                .map(|f| (None, f.night, f.target, f.start_s, f.end_s))
                .collect();
            for _ in 0..60 {
                let i = r.below(p.items.len() as u64) as usize;
                if board.placed[i].is_some() {
                    board.take(i);
                    log.retain(|v| v.0 != Some(i));
                } else if let Some(s) = board.nearest(i, p.items[i].pref_s, None) {
                    board.put(i, s);
                    let it = &p.items[i];
                    log.push((Some(i), it.night, it.target, s, s + it.dur_s));
                }
                let j = r.below(p.items.len() as u64) as usize;
                let skip = log
                    .iter()
                    .filter_map(|v| v.0)
                    .nth(r.below(4) as usize)
                    .filter(|_| r.below(2) == 0);
                let it = &p.items[j];
                let mut want: Vec<(f64, f64)> = it
                    .windows
                    .iter()
                    .filter(|w| w.1 - w.0 >= it.dur_s)
                    .map(|w| (w.0, w.1 - it.dur_s))
                    .collect();
                want.sort_by(|a, b| a.0.total_cmp(&b.0));
                let sp = p.spacing_s[it.target];
                for v in &log {
                    if v.0.is_some() && v.0 == skip {
                        continue;
                    }
                    if v.1 == it.night {
                        subtract(&mut want, v.3 - it.dur_s, v.4);
                    }
                    if v.2 == it.target && sp > 0.0 {
                        let m = (v.3 + v.4) / 2.0;
                        let half = it.dur_s / 2.0;
                        subtract(&mut want, m - sp - half, m + sp - half);
                    }
                }
                board.starts(j, skip);
                assert_eq!(board.ivs, want, "item {j} skip {skip:?}");
            }
        }
    }

    #[test]
    fn nearest_without_is_taking_out_then_nearest() {
        // Where an item would go with a placed item taken out, asked
        // without moving it, is where it goes after the take, on random
        // boards (the other item on the same night or not, of the same
        // target or not); and the night's use after the round trip is the
        // one the take and the put back leave.
        let mut r = Rng(0x9e37_79b9_7f4a_7c15);
        let mut compared = 0;
        for _ in 0..300 {
            let p = random_problem(&mut r);
            let mut board = Board::new(&p);
            for _ in 0..40 {
                let i = r.below(p.items.len() as u64) as usize;
                if board.placed[i].is_none()
                    && let Some(s) = board.nearest(i, p.items[i].pref_s, None)
                {
                    board.put(i, s);
                }
            }
            let placed: Vec<usize> = (0..p.items.len())
                .filter(|&k| board.placed[k].is_some())
                .collect();
            for _ in 0..5 {
                let i = r.below(p.items.len() as u64) as usize;
                if board.placed[i].is_some() || placed.is_empty() {
                    continue;
                }
                // One item against several blockers, its cuts gathered once
                // for them all, as the exchange asks.
                let ks: Vec<usize> = (0..4)
                    .map(|_| placed[r.below(placed.len() as u64) as usize])
                    .collect();
                let pref = p.items[i].pref_s;
                let got: Vec<Option<f64>> = ks
                    .iter()
                    .map(|&k| board.nearest_without(i, pref, k))
                    .collect();
                for (&k, got) in ks.iter().zip(got) {
                    let mut after = board.used.clone();
                    let night = p.items[k].night;
                    after[night] = (after[night] - p.items[k].dur_s) + p.items[k].dur_s;
                    let k_start = board.placed[k].unwrap();
                    board.take(k);
                    let want = board.nearest(i, pref, None);
                    board.put(k, k_start);
                    assert_eq!(
                        got.map(f64::to_bits),
                        want.map(f64::to_bits),
                        "item {i} without {k}"
                    );
                    assert_eq!(board.used, after);
                    compared += 1;
                }
            }
        }
        assert!(compared > 1000, "{compared} cases");
    }

    #[test]
    fn random_packings_keep_the_rules() {
        // Tight nights, so the exchange step (and its capacity test without
        // moves) runs often.
        let mut r = Rng(0x1234_5678_9abc_def1);
        for _ in 0..500 {
            let p = random_problem(&mut r);
            let sol = pack(&p);
            check(&p, &sol).unwrap();
            assert_eq!(pack(&p), sol);
        }
    }

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
