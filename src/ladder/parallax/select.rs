//! Choosing parallax epochs: greedy and exchange selection on the
//! information matrix of the five-parameter fit.
//!
//! Each candidate is an instant on a night with its parallax factors, its
//! per-epoch error σ (both coordinates), the displacement differential
//! chromatic refraction gives it (mas, in α cos δ and δ) and the telescope
//! hours it costs. A design is a set of candidates, at most one per night
//! (its `slot`) and at most `max_per_season` per season. Its quality is
//!
//! J = var(ϖ) + bias(ϖ)²,
//!
//! var(ϖ) the parallax element of the inverse normal matrix N⁻¹ of the
//! weighted least squares for (x0, y0, μx, μy, ϖ) (the model of
//! [`super::solve`], reference epoch `t_ref`), and bias(ϖ) the parallax
//! element of N⁻¹ Aᵀ W d: what the fit makes of the DCR displacements d if
//! they are left in the data (the linear-model bias of a least-squares fit;
//! common practice). A design whose hour angles mirror each other between
//! the two parallax seasons makes the bias vanish, so J rewards balance.
//!
//! Greedy selection adds, step by step, the candidate that lowers J the most
//! (per hour, when a target J is to be reached at least cost); exchange
//! then swaps single epochs while J (or the hours) improves. This is the
//! classical sequential and exchange construction of optimal designs
//! (Fedorov 1972, *Theory of Optimal Experiments*; quoted from memory).
//! `tests/parallax_select.rs` compares it with an exhaustive search on small
//! cases.

use serde::Serialize;

/// σ of a weak prior on every parameter (mas, mas/yr), so that a design of
/// fewer than three epochs has a finite J while the greedy search starts;
/// at 10⁴ mas it changes a σϖ of 1 mas by less than 10⁻⁸.
pub const PRIOR_SIGMA: f64 = 1.0e4;

/// One instant an epoch may be taken at.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Candidate {
    /// Julian epoch (TT), years.
    pub t_yr: f64,
    /// Pα, au.
    pub pf_ra: f64,
    /// Pδ, au.
    pub pf_dec: f64,
    /// Per-epoch error of each coordinate, mas.
    pub sigma_mas: f64,
    /// DCR displacement in α cos δ, mas.
    pub dcr_ra_mas: f64,
    /// DCR displacement in δ, mas.
    pub dcr_dec_mas: f64,
    /// Telescope hours of the visit.
    pub hours: f64,
    /// Night number: at most one candidate per slot in a design.
    pub slot: usize,
    /// Season number: at most `max_per_season` candidates per season.
    pub season: usize,
}

/// A selection problem.
#[derive(Debug, Clone, Copy)]
pub struct Problem<'a> {
    /// The candidates.
    pub cands: &'a [Candidate],
    /// Reference epoch of the fit, Julian year (any fixed value: var(ϖ) and
    /// bias(ϖ) do not depend on it).
    pub t_ref: f64,
    /// Most epochs in one season.
    pub max_per_season: usize,
}

/// A chosen set of candidates and what it buys.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Design {
    /// Indices into the candidates, in time order.
    pub chosen: Vec<usize>,
    /// var(ϖ), mas².
    pub var_mas2: f64,
    /// bias(ϖ) from DCR, mas.
    pub bias_mas: f64,
    /// Telescope hours.
    pub hours: f64,
}

impl Design {
    /// J = var + bias², mas².
    pub fn j(&self) -> f64 {
        self.var_mas2 + self.bias_mas * self.bias_mas
    }
}

/// The normal matrix and the DCR vector of a design.
#[derive(Debug, Clone, Copy)]
struct Acc {
    n: [[f64; 5]; 5],
    b: [f64; 5],
}

impl Acc {
    fn prior() -> Self {
        let mut n = [[0.0; 5]; 5];
        for (i, row) in n.iter_mut().enumerate() {
            row[i] = 1.0 / (PRIOR_SIGMA * PRIOR_SIGMA);
        }
        Acc { n, b: [0.0; 5] }
    }

    fn add(&mut self, c: &Candidate, t_ref: f64, sign: f64) {
        super::add_epoch(
            &mut self.n,
            &mut self.b,
            sign / (c.sigma_mas * c.sigma_mas),
            c.t_yr - t_ref,
            [c.pf_ra, c.pf_dec],
            [c.dcr_ra_mas, c.dcr_dec_mas],
        );
    }

    /// (var(ϖ), bias(ϖ)); infinite when the matrix cannot be inverted.
    /// Only the parallax row of N⁻¹ is formed (the same numbers as the
    /// full inverse's row, see `crate::linalg::spd_inverse_last_row_n`).
    fn score(&self) -> (f64, f64) {
        match crate::linalg::spd_inverse_last_row_n(&self.n) {
            Ok(c) => {
                let bias: f64 = (0..5).map(|j| c[j] * self.b[j]).sum();
                (c[4], bias)
            }
            Err(_) => (f64::INFINITY, 0.0),
        }
    }
}

fn j_of(s: (f64, f64)) -> f64 {
    s.0 + s.1 * s.1
}

/// Screening: the searches below compare J over every admissible candidate
/// at each step. J with one candidate more is first estimated from the
/// inverse of the current normal matrix by the Sherman–Morrison–Woodbury
/// identity (a rank-2 update: the candidate adds two rows; Golub & Van
/// Loan, *Matrix Computations*, the inverse of a matrix plus a low-rank
/// term; common practice), a few dozen operations instead of a Cholesky
/// factorization. Only the candidates whose estimate, widened by
/// [`SCREEN_REL`], could make them the step's choice are then evaluated
/// exactly, in the original order and by the original rule, so the choices
/// are those of the exact search. A finalist whose exact J falls outside
/// its estimate's bounds makes the step evaluate every candidate exactly.
const SCREEN_REL: f64 = 1e-6;

/// Fewest chosen epochs before screening. Three epochs give six equations
/// for the five unknowns, so the normal matrix is the data's; with fewer
/// the weak prior dominates it and the update loses digits, so the exact
/// evaluation runs on every candidate. Measured (2026-12-05: every
/// admissible candidate's exact J against its estimate, at every screened
/// step of `budget` on synthetic programmes of 100 and 300 targets and on
/// the demo, and of `plan` on 100): the largest error was 6.3e-7 of its
/// bound at three epochs, 1.3e-9 at four and more (with the fused
/// multiply-adds of [`Base::j_plus_all`], 5.7e-7 and 1.2e-9 on the
/// `budget` runs). Five before that date:
/// the same choices (the same bytes out), two more steps exact.
const SCREEN_MIN_EPOCHS: usize = 3;

/// The chosen epochs from which the searches screen: [`SCREEN_MIN_EPOCHS`];
/// a test may raise it on its own thread to search exactly throughout.
#[cfg(not(test))]
fn screen_from() -> usize {
    SCREEN_MIN_EPOCHS
}

#[cfg(test)]
thread_local! {
    static SCREEN_FROM: std::cell::Cell<usize> = const { std::cell::Cell::new(SCREEN_MIN_EPOCHS) };
}

#[cfg(test)]
fn screen_from() -> usize {
    SCREEN_FROM.with(|c| c.get())
}

/// What the screening needs of every candidate, computed once per problem
/// and laid out one array per quantity, so that the estimates of a step are
/// one pass over plain arrays: the same values, formed by the same
/// expressions, as the estimate of one candidate formed them (so
/// the estimates, the finalists and the choices are unchanged).
struct Pre {
    /// t − t_ref, years.
    dt: Vec<f64>,
    /// Pα and Pδ.
    pa: Vec<f64>,
    pd: Vec<f64>,
    /// 1/w, w = 1/σ² the candidate's weight.
    inv_w: Vec<f64>,
    /// w itself, and the DCR displacements (α cos δ, δ), for the exact J of
    /// every candidate at once ([`j_with_all`]).
    w: Vec<f64>,
    dra: Vec<f64>,
    ddec: Vec<f64>,
    /// w Aᵀ d, element by element (the candidate's share of the DCR vector).
    wad: [Vec<f64>; 5],
    /// Each candidate's dense slot and season numbers (see [`dense`]) and
    /// their counts, for every search's state.
    slots: (Vec<usize>, usize),
    seasons: (Vec<usize>, usize),
    /// Each candidate's hours, at least 10⁻⁹ (a goal search's cost per
    /// candidate), side by side for the finalists' pass.
    hours: Vec<f64>,
}

impl Pre {
    fn of(p: &Problem) -> Pre {
        let n = p.cands.len();
        let mut pre = Pre {
            dt: Vec::with_capacity(n),
            pa: Vec::with_capacity(n),
            pd: Vec::with_capacity(n),
            inv_w: Vec::with_capacity(n),
            w: Vec::with_capacity(n),
            dra: Vec::with_capacity(n),
            ddec: Vec::with_capacity(n),
            wad: std::array::from_fn(|_| Vec::with_capacity(n)),
            slots: dense(p.cands, |c| c.slot),
            seasons: dense(p.cands, |c| c.season),
            hours: p.cands.iter().map(|c| c.hours.max(1e-9)).collect(),
        };
        for cand in p.cands {
            let w = 1.0 / (cand.sigma_mas * cand.sigma_mas);
            let dt = cand.t_yr - p.t_ref;
            let (pa, pd) = (cand.pf_ra, cand.pf_dec);
            let a = [[1.0, 0.0, dt, 0.0, pa], [0.0, 1.0, 0.0, dt, pd]];
            let d = [cand.dcr_ra_mas, cand.dcr_dec_mas];
            pre.dt.push(dt);
            pre.pa.push(pa);
            pre.pd.push(pd);
            pre.inv_w.push(1.0 / w);
            pre.w.push(w);
            pre.dra.push(d[0]);
            pre.ddec.push(d[1]);
            for (j, v) in pre.wad.iter_mut().enumerate() {
                v.push(w * (a[0][j] * d[0] + a[1][j] * d[1]));
            }
        }
        pre
    }
}

/// The inverse of a normal matrix and its DCR vector, from which J with one
/// candidate more is estimated.
struct Base {
    c: [[f64; 5]; 5],
    b: [f64; 5],
}

impl Base {
    fn of(acc: &Acc) -> Option<Base> {
        let c = crate::linalg::spd_inverse_n(&acc.n).ok()?;
        Some(Base { c, b: acc.b })
    }

    /// For every candidate i, the estimate of J with it added and its error
    /// bound into `est[i]` and `err[i]`; the estimate is NaN when the update
    /// cannot be trusted (the candidate is then a finalist). The arithmetic
    /// is element by element the same for every candidate, whether it may
    /// be added or not (the caller filters), so the loop has no branch.
    ///
    /// On a processor with AVX2 and FMA the loop is compiled for them:
    /// four candidates at a time instead of two, and each product with the
    /// sum it feeds fused into one operation (one rounding instead of two).
    /// Its estimates then differ from the plain loop's in their last bits,
    /// far inside the bound (`SCREEN_REL`, a million times the largest
    /// error measured); the choices are made on exact J either way, so
    /// they are the same.
    fn j_plus_all(&self, pre: &Pre, est: &mut Vec<f64>, err: &mut Vec<f64>) {
        self.j_plus_runs(pre, &[(0, pre.dt.len())], est, err);
    }

    /// [`Self::j_plus_all`] for the candidates of the index ranges `runs`
    /// only (each `(from, to)`, `to` excluded): their estimates and bounds,
    /// each the number `j_plus_all` gives it (a candidate's arithmetic
    /// does not involve the others), the other entries NaN. The searches
    /// ask it for the admissible candidates alone ([`admissible_runs`]): on
    /// a long horizon most seasons fill up and most candidates drop out.
    fn j_plus_runs(
        &self,
        pre: &Pre,
        runs: &[(usize, usize)],
        est: &mut Vec<f64>,
        err: &mut Vec<f64>,
    ) {
        let n = pre.dt.len();
        // NaN outside the runs; the entries inside are written below (so
        // not filled first: on a screen of every candidate that halves the
        // writes).
        est.resize(n, f64::NAN);
        err.resize(n, f64::NAN);
        let mut gap_from = 0;
        for &(from, to) in runs.iter().chain(std::iter::once(&(n, n))) {
            est[gap_from..from].fill(f64::NAN);
            err[gap_from..from].fill(f64::NAN);
            gap_from = to;
        }
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
        {
            for &(from, to) in runs {
                // SAFETY: the processor has AVX2 and FMA, checked just above.
                unsafe { self.j_plus_avx2(pre, from, to, est, err) };
            }
            return;
        }
        for &(from, to) in runs {
            self.j_plus_body::<false>(pre, from, to, est, err);
        }
    }

    /// [`Self::j_plus_all`]'s loop compiled for AVX2, its products and
    /// sums fused.
    ///
    /// # Safety
    /// Only on a processor with AVX2 and FMA.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2,fma")]
    unsafe fn j_plus_avx2(
        &self,
        pre: &Pre,
        from: usize,
        to: usize,
        est: &mut [f64],
        err: &mut [f64],
    ) {
        self.j_plus_body::<true>(pre, from, to, est, err);
    }

    /// [`Self::j_plus_all`]'s loop over the candidates `from..to`, into the
    /// same entries of `est` and `err` (of the candidates' length); with
    /// `FMA` each a·b + c is one fused multiply-add (to be compiled only
    /// where the processor has them: elsewhere `mul_add` is a slow call).
    #[allow(clippy::needless_range_loop)] // index form mirrors the formula
    #[inline(always)]
    fn j_plus_body<const FMA: bool>(
        &self,
        pre: &Pre,
        from: usize,
        to: usize,
        est: &mut [f64],
        err: &mut [f64],
    ) {
        let madd = |a: f64, b: f64, c: f64| if FMA { a.mul_add(b, c) } else { a * b + c };
        let n = to - from;
        let c = &self.c;
        let (dts, pas, pds) = (&pre.dt[from..to], &pre.pa[from..to], &pre.pd[from..to]);
        let iws = &pre.inv_w[from..to];
        let wad: [&[f64]; 5] = std::array::from_fn(|j| &pre.wad[j][from..to]);
        let (est, err) = (&mut est[from..to], &mut err[from..to]);
        for i in 0..n {
            let (dt, pa, pd, inv_w) = (dts[i], pas[i], pds[i], iws[i]);
            // U = C Aᵀ (5 × 2), S = W⁻¹ + A U (2 × 2); A's rows are
            // (1, 0, dt, 0, Pα) and (0, 1, 0, dt, Pδ).
            let mut u = [[0.0; 2]; 5];
            for (ur, cr) in u.iter_mut().zip(c) {
                ur[0] = madd(pa, cr[4], madd(dt, cr[2], cr[0]));
                ur[1] = madd(pd, cr[4], madd(dt, cr[3], cr[1]));
            }
            let s00 = madd(pa, u[4][0], madd(dt, u[2][0], u[0][0])) + inv_w;
            let s01 = madd(pa, u[4][1], madd(dt, u[2][1], u[0][1]));
            let s11 = madd(pd, u[4][1], madd(dt, u[3][1], u[1][1])) + inv_w;
            let det = madd(s00, s11, -(s01 * s01));
            // g = S⁻¹ U₄ᵀ; the parallax row of the new inverse, C₄ − g U ᵀ.
            let g0 = madd(s11, u[4][0], -(s01 * u[4][1])) / det;
            let g1 = madd(s00, u[4][1], -(s01 * u[4][0])) / det;
            let mut bias = 0.0;
            let mut bias_abs = 0.0;
            let mut var = 0.0;
            for j in 0..5 {
                let row = madd(-g1, u[j][1], madd(-g0, u[j][0], c[4][j]));
                let bj = self.b[j] + wad[j][i];
                bias += row * bj;
                bias_abs += (row * bj).abs();
                if j == 4 {
                    var = row;
                }
            }
            let j = madd(bias, bias, var);
            let e = SCREEN_REL * (var.abs() + c[4][4].abs() + bias_abs * (bias_abs + 1.0));
            // Each lane's answer or NaN, chosen by a bit mask: every
            // lane's arithmetic runs in full (with `&&` and `if` the
            // compiler loaded the DCR shares and stored the answers
            // under masks, slow memory operations), the same bits out.
            let ok = det.is_finite() & (det > 0.0) & j.is_finite();
            let keep = (ok as u64).wrapping_neg();
            let nan = f64::NAN.to_bits() & !keep;
            est[i] = f64::from_bits((j.to_bits() & keep) | nan);
            err[i] = f64::from_bits((e.to_bits() & keep) | nan);
        }
    }
}

/// The exact J of the design `acc` with each candidate added, for every
/// candidate (admissible or not: the caller filters), into `out`.
///
/// Candidate by candidate these are the IEEE operations, in the same order,
/// of `Acc::add` (its `super::add_epoch`) followed by `Acc::score`
/// (`crate::linalg::spd_inverse_last_row_n`: Cholesky factor, its inverse,
/// the last row of the inverse) and `j_of`, so the numbers are the same to
/// the bit as `State::j_with`'s; a design whose matrix cannot be inverted
/// (a value not finite, a pivot refused) gets J = ∞ as there. The work has
/// no branch, so the loop runs over several candidates at once (four with
/// AVX2; no fused multiply-add, so the same numbers).
fn j_with_all(acc: &Acc, pre: &Pre, out: &mut Vec<f64>) {
    let n = pre.dt.len();
    out.clear();
    out.resize(n, 0.0);
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the processor has AVX2, checked just above.
        unsafe { j_with_avx2(acc, pre, out) };
        return;
    }
    j_with_body(acc, pre, out, 0);
}

/// Where A's rows, (1, 0, dt, 0, Pα) and (0, 1, 0, dt, Pδ), are not
/// structurally zero. [`j_with_all`] adds to the normal matrix only the
/// entries of each row's outer product w·rowᵀ·row at these indices (9 of
/// 25), and its numbers are still `Acc::add`'s, to the bit:
///
/// - a term left out is (w·x)·y with x or y the constant 0 and the other
///   among 1, dt, Pα, Pδ (of the same row). When w·x and y are finite it is
///   ±0, and adding ±0 to an entry e changes it only when e is −0; no entry
///   of a normal matrix is ever −0 (they start at +0 or the prior's 10⁻⁸
///   and only have terms added, and in round-to-nearest a sum is −0 only
///   when both terms are). So every entry is the one `Acc::add` forms.
/// - otherwise the term is not finite: w is not finite, and so is the
///   kept term (w·1)·1 of entry (0, 0) or (1, 1); or z, the one of x, y
///   that is not the constant 0, or w·z is not finite, and so is the kept
///   diagonal term (w·z)·z of the same row (a NaN times anything, or ±∞
///   times a non-zero number, is not finite, and ±∞·0 is NaN). An entry a
///   term not finite is added to stays not finite, so the matrix is not
///   finite both ways and J is infinite both ways.
///
/// The DCR vector b is updated in full (its terms are not checked).
const NONZERO: [[usize; 3]; 2] = [[0, 2, 4], [1, 3, 4]];

/// [`j_with_all`]'s loop in AVX2 instructions, four candidates in each
/// (no fused multiply-add: each operation the one [`j_with_body`] does on
/// each lane); the last candidates, fewer than four, by [`j_with_body`].
///
/// # Safety
/// Only on a processor with AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
#[allow(clippy::needless_range_loop)] // index form mirrors linalg's loops
unsafe fn j_with_avx2(acc: &Acc, pre: &Pre, out: &mut [f64]) {
    use std::arch::x86_64::*;
    const N: usize = 5;
    let n = pre.dt.len();
    assert!(out.len() >= n);
    let tol = _mm256_set1_pd(crate::linalg::PIVOT_REL_TOL);
    let zero = _mm256_set1_pd(0.0);
    let one = _mm256_set1_pd(1.0);
    let neg0 = _mm256_set1_pd(-0.0);
    let (add, mul) = (|x, y| _mm256_add_pd(x, y), |x, y| _mm256_mul_pd(x, y));
    let mut at = 0;
    while at + 4 <= n {
        // SAFETY: at + 4 ≤ n, the length of every array read.
        let get = |v: &[f64]| unsafe { _mm256_loadu_pd(v.as_ptr().add(at)) };
        let (w, dt, pa, pd) = (get(&pre.w), get(&pre.dt), get(&pre.pa), get(&pre.pd));
        let (dra, ddec) = (get(&pre.dra), get(&pre.ddec));
        let mut a: [[__m256d; N]; N] =
            std::array::from_fn(|r| std::array::from_fn(|c| _mm256_set1_pd(acc.n[r][c])));
        let mut b: [__m256d; N] = std::array::from_fn(|r| _mm256_set1_pd(acc.b[r]));
        // Only the entries of each row's outer product off its structural
        // zeros (see [`NONZERO`]).
        for (row, d, nz) in [
            ([one, zero, dt, zero, pa], dra, NONZERO[0]),
            ([zero, one, zero, dt, pd], ddec, NONZERO[1]),
        ] {
            for r in 0..N {
                b[r] = add(b[r], mul(mul(w, row[r]), d));
            }
            for r in nz {
                for c in nz {
                    a[r][c] = add(a[r][c], mul(mul(w, row[r]), row[c]));
                }
            }
        }
        // Finite: x − x is 0 (ordered) only for a finite x.
        let mut ok = _mm256_castsi256_pd(_mm256_set1_epi64x(-1));
        for r in 0..N {
            for c in 0..N {
                let x = a[r][c];
                ok = _mm256_and_pd(ok, _mm256_cmp_pd::<_CMP_EQ_OQ>(_mm256_sub_pd(x, x), zero));
            }
        }
        let mut lm = [[zero; N]; N];
        for r in 0..N {
            for c in 0..=r {
                let mut s = neg0;
                for k in 0..c {
                    s = add(s, mul(lm[r][k], lm[c][k]));
                }
                if r == c {
                    let d = _mm256_sub_pd(a[r][r], s);
                    // Not refused: d > tol·|a_rr| and d > 0 (false for NaN).
                    let lim = mul(tol, _mm256_andnot_pd(neg0, a[r][r]));
                    ok = _mm256_and_pd(ok, _mm256_cmp_pd::<_CMP_GT_OQ>(d, lim));
                    ok = _mm256_and_pd(ok, _mm256_cmp_pd::<_CMP_GT_OQ>(d, zero));
                    lm[r][r] = _mm256_sqrt_pd(d);
                } else {
                    lm[r][c] = _mm256_div_pd(_mm256_sub_pd(a[r][c], s), lm[c][c]);
                }
            }
        }
        let mut li = [[zero; N]; N];
        for r in 0..N {
            li[r][r] = _mm256_div_pd(one, lm[r][r]);
            for c in 0..r {
                let mut s = neg0;
                for k in c..r {
                    s = add(s, mul(lm[r][k], li[k][c]));
                }
                li[r][c] = _mm256_div_pd(_mm256_xor_pd(s, neg0), lm[r][r]);
            }
        }
        let mut bias = neg0;
        let mut var = zero;
        for c in 0..N {
            let row = add(neg0, mul(li[N - 1][N - 1], li[N - 1][c]));
            bias = add(bias, mul(row, b[c]));
            if c == N - 1 {
                var = row;
            }
        }
        let j = add(var, mul(bias, bias));
        let j = _mm256_blendv_pd(_mm256_set1_pd(f64::INFINITY), j, ok);
        // SAFETY: at + 4 ≤ n ≤ out.len().
        unsafe { _mm256_storeu_pd(out.as_mut_ptr().add(at), j) };
        at += 4;
    }
    j_with_body(acc, pre, out, at);
}

/// Lanes of [`j_with_body`]: candidates evaluated side by side, each
/// operation written once for all lanes so that it compiles to one vector
/// instruction (the same IEEE operation on every lane).
const LANES: usize = 4;
type Lanes = [f64; LANES];

#[inline(always)]
fn lanes(f: impl Fn(usize) -> f64) -> Lanes {
    std::array::from_fn(f)
}

/// [`j_with_all`]'s loop, into `out` of the candidates' length: the
/// candidates [`LANES`] at a time (the last group filled up with copies of
/// its last candidate, whose answers are dropped).
#[allow(clippy::needless_range_loop)] // index form mirrors linalg's loops
#[inline(always)]
fn j_with_body(acc: &Acc, pre: &Pre, out: &mut [f64], from: usize) {
    const N: usize = 5;
    let n = pre.dt.len();
    let tol = crate::linalg::PIVOT_REL_TOL;
    let mut at = from;
    while at < n {
        let idx: [usize; LANES] = std::array::from_fn(|l| (at + l).min(n - 1));
        let get = |v: &[f64]| lanes(|l| v[idx[l]]);
        let (w, dt, pa, pd) = (get(&pre.w), get(&pre.dt), get(&pre.pa), get(&pre.pd));
        let (dra, ddec) = (get(&pre.dra), get(&pre.ddec));
        let one = [1.0; LANES];
        let zero = [0.0; LANES];
        // Acc::add (super::add_epoch), sign 1: b[r] += w·row[r]·d and
        // n[r][c] += w·row[r]·row[c], the first row, then the second; the
        // terms at a row's structural zeros left out (see [`NONZERO`]).
        let mut a: [[Lanes; N]; N] =
            std::array::from_fn(|r| std::array::from_fn(|c| [acc.n[r][c]; LANES]));
        let mut b: [Lanes; N] = std::array::from_fn(|r| [acc.b[r]; LANES]);
        for (row, d, nz) in [
            ([one, zero, dt, zero, pa], dra, NONZERO[0]),
            ([zero, one, zero, dt, pd], ddec, NONZERO[1]),
        ] {
            for r in 0..N {
                b[r] = lanes(|l| b[r][l] + w[l] * row[r][l] * d[l]);
            }
            for r in nz {
                for c in nz {
                    a[r][c] = lanes(|l| a[r][c][l] + w[l] * row[r][l] * row[c][l]);
                }
            }
        }
        // crate::linalg::cholesky_inverse: a value not finite or a pivot
        // refused makes the design's J infinite.
        let mut ok = [true; LANES];
        for r in 0..N {
            for c in 0..N {
                for l in 0..LANES {
                    ok[l] &= a[r][c][l].is_finite();
                }
            }
        }
        let mut lm = [[zero; N]; N];
        for r in 0..N {
            for c in 0..=r {
                let mut s = [-0.0; LANES];
                for k in 0..c {
                    s = lanes(|l| s[l] + lm[r][k][l] * lm[c][k][l]);
                }
                if r == c {
                    let d = lanes(|l| a[r][r][l] - s[l]);
                    for l in 0..LANES {
                        ok[l] &= !(d[l].is_nan() || d[l] <= tol * a[r][r][l].abs() || d[l] <= 0.0);
                    }
                    lm[r][r] = lanes(|l| d[l].sqrt());
                } else {
                    lm[r][c] = lanes(|l| (a[r][c][l] - s[l]) / lm[c][c][l]);
                }
            }
        }
        let mut li = [[zero; N]; N];
        for r in 0..N {
            li[r][r] = lanes(|l| 1.0 / lm[r][r][l]);
            for c in 0..r {
                let mut s = [-0.0; LANES];
                for k in c..r {
                    s = lanes(|l| s[l] + lm[r][k][l] * li[k][c][l]);
                }
                li[r][c] = lanes(|l| -s[l] / lm[r][r][l]);
            }
        }
        // The last row of L⁻ᵀ L⁻¹ (one term each), the bias and J.
        let mut bias = [-0.0; LANES];
        let mut var = zero;
        for c in 0..N {
            let row = lanes(|l| -0.0 + li[N - 1][N - 1][l] * li[N - 1][c][l]);
            bias = lanes(|l| bias[l] + row[l] * b[c][l]);
            if c == N - 1 {
                var = row;
            }
        }
        let j = lanes(|l| var[l] + bias[l] * bias[l]);
        for l in 0..LANES.min(n - at) {
            out[at + l] = if ok[l] { j[l] } else { f64::INFINITY };
        }
        at += LANES;
    }
}

/// Whether an exact J lies within its estimate's bounds.
fn within(exact: f64, (est, err): (f64, f64)) -> bool {
    (exact - est).abs() <= err
}

/// The quality of a set of candidates (any order), with the weak prior.
pub fn evaluate(p: &Problem, chosen: &[usize]) -> Design {
    let mut acc = Acc::prior();
    for &i in chosen {
        acc.add(&p.cands[i], p.t_ref, 1.0);
    }
    let (var, bias) = acc.score();
    let mut chosen = chosen.to_vec();
    chosen.sort_by(|a, b| p.cands[*a].t_yr.total_cmp(&p.cands[*b].t_yr));
    Design {
        hours: chosen.iter().map(|i| p.cands[*i].hours).sum(),
        chosen,
        var_mas2: var,
        bias_mas: bias,
    }
}

/// When the greedy search stops.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Stop {
    /// After this many epochs (or when no candidate may be added).
    Count(usize),
    /// As soon as J ≤ this (mas²), choosing by the fall of J per hour; or
    /// when no candidate may be added.
    Target(f64),
}

/// Dense numbers for the values of `key` over the candidates (slot and
/// season numbers may be sparse or large), so that the search keeps its
/// counts in plain vectors.
fn dense(cands: &[Candidate], key: impl Fn(&Candidate) -> usize) -> (Vec<usize>, usize) {
    let keys: Vec<usize> = cands.iter().map(key).collect();
    // Candidates in time order (as the methods make them) have their slots
    // and seasons in order too: each value's rank in one pass.
    if keys.is_sorted() {
        let mut rank = 0;
        let of = keys
            .iter()
            .enumerate()
            .map(|(i, k)| {
                rank += usize::from(i > 0 && *k != keys[i - 1]);
                rank
            })
            .collect();
        return (of, if keys.is_empty() { 0 } else { rank + 1 });
    }
    // Otherwise the rank among the sorted distinct values.
    let mut values = keys.clone();
    values.sort_unstable();
    values.dedup();
    let of = keys
        .iter()
        .map(|k| values.binary_search(k).unwrap_or(0))
        .collect();
    (of, values.len())
}

struct State<'a> {
    p: Problem<'a>,
    pre: &'a Pre,
    acc: Acc,
    chosen: Vec<usize>,
    /// Per candidate: its dense slot and season numbers (the problem's, in
    /// [`Pre`], shared by every search of it), and whether chosen.
    slot_of: &'a [usize],
    season_of: &'a [usize],
    is_chosen: Vec<bool>,
    /// Per dense slot: taken; per dense season: epochs chosen.
    slot_used: Vec<bool>,
    per_season: Vec<usize>,
}

impl<'a> State<'a> {
    fn new(p: Problem<'a>, pre: &'a Pre) -> Self {
        let (slot_of, n_slots) = (&pre.slots.0[..], pre.slots.1);
        let (season_of, n_seasons) = (&pre.seasons.0[..], pre.seasons.1);
        State {
            p,
            pre,
            acc: Acc::prior(),
            chosen: Vec::new(),
            slot_of,
            season_of,
            is_chosen: vec![false; p.cands.len()],
            slot_used: vec![false; n_slots],
            per_season: vec![0; n_seasons],
        }
    }

    fn may_add(&self, i: usize, freed: Option<usize>) -> bool {
        let (slot, season) = (self.slot_of[i], self.season_of[i]);
        let slot_free = !self.slot_used[slot] || freed.is_some_and(|f| self.slot_of[f] == slot);
        let in_season =
            self.per_season[season] - freed.map_or(0, |f| (self.season_of[f] == season) as usize);
        slot_free && in_season < self.p.max_per_season && !self.is_chosen[i]
    }

    fn push(&mut self, i: usize) {
        let c = &self.p.cands[i];
        self.acc.add(c, self.p.t_ref, 1.0);
        self.slot_used[self.slot_of[i]] = true;
        self.per_season[self.season_of[i]] += 1;
        self.is_chosen[i] = true;
        self.chosen.push(i);
    }

    fn remove_at(&mut self, k: usize) {
        let i = self.chosen.swap_remove(k);
        let c = &self.p.cands[i];
        self.acc.add(c, self.p.t_ref, -1.0);
        self.slot_used[self.slot_of[i]] = false;
        self.per_season[self.season_of[i]] -= 1;
        self.is_chosen[i] = false;
    }

    fn j(&self) -> f64 {
        j_of(self.acc.score())
    }

    /// The k-th chosen epoch swapped for candidate `i`, which takes its
    /// position.
    fn swap_in(&mut self, k: usize, i: usize) {
        self.remove_at(k);
        self.push(i);
        let last = self.chosen.len() - 1;
        self.chosen.swap(k.min(last), last);
    }

    /// J with candidate `i` added.
    fn j_with(&self, i: usize) -> f64 {
        let mut a = self.acc;
        a.add(&self.p.cands[i], self.p.t_ref, 1.0);
        j_of(a.score())
    }

    /// J with the k-th chosen candidate replaced by `i`.
    fn j_swap(&self, k: usize, i: usize) -> f64 {
        let mut a = self.acc;
        a.add(&self.p.cands[self.chosen[k]], self.p.t_ref, -1.0);
        a.add(&self.p.cands[i], self.p.t_ref, 1.0);
        j_of(a.score())
    }

    /// J with the k-th chosen candidate removed.
    fn j_without(&self, k: usize) -> f64 {
        let mut a = self.acc;
        a.add(&self.p.cands[self.chosen[k]], self.p.t_ref, -1.0);
        j_of(a.score())
    }
}

/// Greedy selection from `seed` (candidates that must be in the design),
/// then exchange: with [`Stop::Count`] single swaps that lower J; with
/// [`Stop::Target`], once J is reached, removals and swaps that save hours
/// while J stays reached. Deterministic for the same input.
pub fn select(p: Problem, seed: &[usize], stop: Stop) -> Design {
    select_inner(p, seed, stop, None)
}

/// [`select`], keeping in `memo` what the search of the same problem and
/// seed finds for the next call with another stop (the same answers, see
/// [`Memo`]).
pub fn select_with(p: Problem, seed: &[usize], stop: Stop, memo: &mut Memo) -> Design {
    let e = memo.entry(p, seed);
    if let Stop::Count(k) = stop
        && let Some((_, d)) = e.count.iter().find(|(kk, _)| *kk == k)
    {
        return d.clone();
    }
    let d = select_inner(p, seed, stop, Some(&mut e.trails));
    if let Stop::Count(k) = stop {
        e.count.push((k, d.clone()));
    }
    d
}

/// What searches of one problem (its candidates, reference epoch, cap) and
/// seed found, kept for the next search of the same problem and seed with
/// another stop: the goals of one target ask the same problems with
/// targets J one after another.
///
/// The greedy search with [`Stop::Target`] chooses each step by the fall of
/// J per hour, which does not depend on the target: with any target it
/// takes the same candidates in the same order and only stops sooner or
/// later (at the first state whose J is reached). Its steps are kept (the
/// candidates taken and the J of each state), so another target replays
/// the states (the same additions in the same order, so the same normal
/// matrix to the last bit) up to its stop, and searches on from the last
/// kept state only when the target is tighter than any kept J. Likewise the
/// exchange of a design that does not reach its target
/// (`exchange_sequential`) starts from the same state (the greedy search
/// ran out of candidates) and swaps by a rule without the target, which it
/// only checks before each position: its checks and swaps are kept and
/// replayed. A [`Stop::Count`] search's whole answer is kept.
#[derive(Default)]
pub struct Memo {
    entries: Vec<Entry>,
}

struct Entry {
    cands: Vec<Candidate>,
    t_ref: f64,
    max_per_season: usize,
    seed: Vec<usize>,
    count: Vec<(usize, Design)>,
    trails: Trails,
}

impl Memo {
    fn entry(&mut self, p: Problem, seed: &[usize]) -> &mut Entry {
        let at = self.entries.iter().position(|e| {
            e.t_ref.to_bits() == p.t_ref.to_bits()
                && e.max_per_season == p.max_per_season
                && e.seed == seed
                && e.cands == p.cands
        });
        let at = at.unwrap_or_else(|| {
            self.entries.push(Entry {
                cands: p.cands.to_vec(),
                t_ref: p.t_ref,
                max_per_season: p.max_per_season,
                seed: seed.to_vec(),
                count: Vec::new(),
                trails: Trails::default(),
            });
            self.entries.len() - 1
        });
        &mut self.entries[at]
    }
}

/// The kept steps of one problem and seed (see [`Memo`]).
#[derive(Default)]
struct Trails {
    /// The greedy search by J per hour: the candidates taken, in order.
    picks: Vec<usize>,
    /// J of the seed and of each state after it (`picks.len()` or one more
    /// entries: the last state's J is kept when it was computed).
    js: Vec<f64>,
    /// Whether no candidate could be added to the last state.
    exhausted: bool,
    /// The exchange of the exhausted design (`exchange_sequential`).
    seq: Vec<SeqEvent>,
    /// Where that exchange goes on: (pass, position, improved in the pass)
    /// of its last check; None when it ran to its end (or has not begun:
    /// see `seq_begun`).
    seq_at: Option<(usize, usize, bool)>,
    seq_begun: bool,
}

/// One step of `exchange_sequential`.
#[derive(Clone, Copy)]
enum SeqEvent {
    /// J checked against the target before a position.
    Check(f64),
    /// The epoch at this position swapped for this candidate.
    Swap(usize, usize),
}

/// [`select`], replaying and keeping a [`Stop::Target`] search's steps in
/// `trails` when given.
fn select_inner(p: Problem, seed: &[usize], stop: Stop, trails: Option<&mut Trails>) -> Design {
    let pre = Pre::of(&p);
    if !matches!(stop, Stop::Count(_)) || p.cands.is_empty() {
        return run(p, &pre, seed, None, stop, trails).0;
    }
    let (first, first_pick) = run(p, &pre, seed, None, stop, None);
    // Exchange stops at a local optimum of single swaps: start again from
    // each extreme of the RA factor and keep the best (greedy starts that
    // differ in the first, prior-dominated steps).
    let extreme = |s: f64| {
        (0..p.cands.len())
            .max_by(|a, b| (s * p.cands[*a].pf_ra).total_cmp(&(s * p.cands[*b].pf_ra)))
    };
    let mut best = first;
    for start in [extreme(1.0), extreme(-1.0)].into_iter().flatten() {
        // A start the first search took first, or one the seed leaves no
        // room for, is that search again (the same state, step by step):
        // its design is `first`, which it cannot better.
        if first_pick == Some(start) || !admissible_after(p, &pre, seed, start) {
            continue;
        }
        let (d, _) = run(p, &pre, seed, Some(start), stop, None);
        if d.j() < best.j() * (1.0 - 1e-12) {
            best = d;
        }
    }
    best
}

/// Whether candidate `i` may be added once `seed` is (as [`run`] adds it).
fn admissible_after(p: Problem, pre: &Pre, seed: &[usize], i: usize) -> bool {
    let mut st = State::new(p, pre);
    for &j in seed {
        if st.may_add(j, None) {
            st.push(j);
        }
    }
    st.may_add(i, None)
}

/// One greedy start (`start` added first when admissible, free to be
/// exchanged later) and its exchange.
/// Also the candidate the greedy search took first after the seed and the
/// start (none when it took none).
fn run(
    p: Problem,
    pre: &Pre,
    seed: &[usize],
    start: Option<usize>,
    stop: Stop,
    mut trails: Option<&mut Trails>,
) -> (Design, Option<usize>) {
    let mut st = State::new(p, pre);
    for &i in seed {
        if st.may_add(i, None) {
            st.push(i);
        }
    }
    let mut first_pick = None;
    if let Some(i) = start
        && st.may_add(i, None)
    {
        st.push(i);
    }
    let n = p.cands.len();
    let (mut est, mut err, mut exact_js) = (Vec::new(), Vec::new(), Vec::new());
    let mut runs = Vec::new();
    // The kept steps of this search with other targets (see [`Memo`]):
    // their states up to this target's stop, or all of them.
    if let Stop::Count(_) = stop {
        trails = None;
    }
    let mut greedy_done = false;
    if let (Some(tr), Stop::Target(t)) = (trails.as_deref_mut(), stop) {
        let upto = tr.js.iter().position(|j| *j <= t);
        for &i in &tr.picks[..upto.unwrap_or(tr.picks.len())] {
            first_pick.get_or_insert(i);
            st.push(i);
        }
        greedy_done = upto.is_some() || tr.exhausted;
    }
    if !greedy_done {
        loop {
            let cur = st.j();
            if let Some(tr) = trails.as_deref_mut()
                && tr.js.len() == tr.picks.len()
            {
                tr.js.push(cur);
            }
            let done = match stop {
                Stop::Count(k) => st.chosen.len() >= k,
                Stop::Target(t) => cur <= t,
            };
            if done {
                break;
            }
            let per = |i: usize| match stop {
                Stop::Count(_) => 1.0,
                Stop::Target(_) => pre.hours[i],
            };
            let exact_best = |only: &mut dyn Iterator<Item = (usize, Option<f64>)>| {
                let mut best: Option<(f64, usize)> = None;
                for (i, known) in only {
                    if !st.may_add(i, None) {
                        continue;
                    }
                    let jn = known.unwrap_or_else(|| st.j_with(i));
                    // Dividing by 1 (a count) leaves the fall as it is.
                    let gain = (cur - jn) / per(i);
                    if best.is_none_or(|b| gain > b.0) {
                        best = Some((gain, i));
                    }
                }
                best
            };
            let base = (cur.is_finite() && st.chosen.len() >= screen_from())
                .then(|| Base::of(&st.acc))
                .flatten();
            let best = match base {
                None => {
                    // Every candidate's exact J at once (the same numbers).
                    j_with_all(&st.acc, pre, &mut exact_js);
                    exact_best(&mut (0..n).map(|i| (i, Some(exact_js[i]))))
                }
                Some(base) => {
                    // Estimates of the gain and their bounds; the largest gain
                    // surely reached; the finalists that may reach it.
                    admissible_runs(&st, None, &mut runs);
                    base.j_plus_runs(pre, &runs, &mut est, &mut err);
                    // One pass over the admissible candidates (the runs
                    // hold them alone, in order, and nothing was added
                    // since): the largest lower bound so far, and the
                    // candidates whose upper bound reaches it. The bound only
                    // rises, and a candidate's lower bound is at most its
                    // upper one (err ≥ 0, per > 0), so a candidate passed
                    // over could neither raise the final bound nor reach it:
                    // keeping those that reach the final bound gives the
                    // finalists of the two passes over every candidate, in
                    // the same order.
                    let mut lb = f64::NEG_INFINITY;
                    let mut finalists: Vec<(usize, (f64, f64))> = Vec::new();
                    for i in runs.iter().flat_map(|&(from, to)| from..to) {
                        let (e, r) = (est[i], err[i]);
                        if !(e.is_nan() || (cur - e + r) / per(i) >= lb) {
                            continue;
                        }
                        if e.is_finite() {
                            lb = f64::max(lb, (cur - e - r) / per(i));
                        }
                        finalists.push((i, (e, r)));
                    }
                    finalists.retain(|(i, (e, r))| e.is_nan() || (cur - e + r) / per(*i) >= lb);
                    // Each finalist's exact J, kept for the choice.
                    let exact: Option<Vec<(usize, Option<f64>)>> = finalists
                        .iter()
                        .map(|(i, e)| {
                            let jn = st.j_with(*i);
                            (e.0.is_nan() || within(jn, *e)).then_some((*i, Some(jn)))
                        })
                        .collect();
                    match exact {
                        Some(x) => exact_best(&mut x.into_iter()),
                        None => exact_best(&mut (0..n).map(|i| (i, None))),
                    }
                }
            };
            match best {
                Some((_, i)) => {
                    first_pick.get_or_insert(i);
                    st.push(i);
                    if let Some(tr) = trails.as_deref_mut() {
                        tr.picks.push(i);
                    }
                }
                None => {
                    if let Some(tr) = trails.as_deref_mut() {
                        tr.exhausted = true;
                    }
                    break;
                }
            }
        }
    }
    match stop {
        Stop::Count(_) => exchange_for_j(&mut st, seed),
        Stop::Target(t) if st.j() <= t => {
            prune(&mut st, seed, t);
            exchange_for_hours(&mut st, seed, t);
            prune(&mut st, seed, t);
        }
        // Not reached with every admissible candidate the caps allow:
        // position by position, the best swap, until J is reached or a pass
        // changes nothing (Fedorov's full exchange would cost k times more
        // on the long horizon designs this case meets).
        Stop::Target(t) => match trails {
            Some(tr) => exchange_sequential(&mut st, seed, t, tr),
            None => exchange_sequential(&mut st, seed, t, &mut Trails::default()),
        },
    }
    (evaluate(&p, &st.chosen), first_pick)
}

const PASSES: usize = 6;

/// Estimates of J for every admissible swap of the k-th chosen epoch (its
/// candidate index, estimate and bound), from the exact inverse of the
/// design without it; None when screening does not apply (see
/// [`SCREEN_MIN_EPOCHS`]).
fn screen_swap_at(st: &State, k: usize, cur: f64) -> Option<Vec<(usize, (f64, f64))>> {
    if !cur.is_finite() || st.chosen.len() < screen_from().saturating_add(1) {
        return None;
    }
    let mut acc = st.acc;
    acc.add(&st.p.cands[st.chosen[k]], st.p.t_ref, -1.0);
    let base = Base::of(&acc)?;
    let (mut est, mut err, mut runs) = (Vec::new(), Vec::new(), Vec::new());
    admissible_runs(st, Some(st.chosen[k]), &mut runs);
    base.j_plus_runs(st.pre, &runs, &mut est, &mut err);
    Some(
        runs.iter()
            .flat_map(|&(from, to)| from..to)
            .map(|i| (i, (est[i], err[i])))
            .collect(),
    )
}

/// The candidates `st.may_add(i, freed)` admits, as maximal ranges of
/// consecutive indices `(from, to)` (`to` excluded), in index order.
fn admissible_runs(st: &State, freed: Option<usize>, out: &mut Vec<(usize, usize)>) {
    out.clear();
    let n = st.p.cands.len();
    let mut i = 0;
    while i < n {
        if !st.may_add(i, freed) {
            i += 1;
            continue;
        }
        let from = i;
        while i < n && st.may_add(i, freed) {
            i += 1;
        }
        out.push((from, i));
    }
}

/// A screened exchange: the position in the chosen epochs, the candidate
/// that would take its place and the estimate of J with its error bound.
type Swap = (usize, usize, (f64, f64));

/// [`screen_swap_at`]'s estimates for every chosen epoch not in the seed:
/// the positions screened, each one's estimates and bounds for every
/// candidate (admissible or not) in `bufs`; None when screening does not
/// apply to one of them. The buffers are kept from step to step.
fn screen_swaps(
    st: &State,
    seed: &[usize],
    cur: f64,
    bufs: &mut Vec<(Vec<f64>, Vec<f64>)>,
) -> Option<Vec<usize>> {
    if !cur.is_finite() || st.chosen.len() < screen_from().saturating_add(1) {
        return None;
    }
    let mut free = Vec::new();
    for k in 0..st.chosen.len() {
        if seed.contains(&st.chosen[k]) {
            continue;
        }
        let mut acc = st.acc;
        acc.add(&st.p.cands[st.chosen[k]], st.p.t_ref, -1.0);
        let base = Base::of(&acc)?;
        if bufs.len() <= free.len() {
            bufs.push((Vec::new(), Vec::new()));
        }
        let (est, err) = &mut bufs[free.len()];
        base.j_plus_all(st.pre, est, err);
        free.push(k);
    }
    Some(free)
}

/// Every finalist's exact J (position, candidate, J), when each lies within
/// its estimate's bounds; None at the first that does not.
fn exact_swaps(st: &State, finalists: &[Swap]) -> Option<Vec<(usize, usize, Option<f64>)>> {
    finalists
        .iter()
        .map(|(k, i, e)| {
            let jn = st.j_swap(*k, *i);
            (e.0.is_nan() || within(jn, *e)).then_some((*k, *i, Some(jn)))
        })
        .collect()
}

/// Fedorov's exchange: the single swap (a chosen epoch for an unchosen
/// candidate) that lowers J the most, repeated while one does.
#[inline(never)] // its own entry in a profile, apart from the greedy search
fn exchange_for_j(st: &mut State, seed: &[usize]) {
    let n = st.p.cands.len();
    let max_swaps = PASSES * st.chosen.len().max(1);
    let mut bufs = Vec::new();
    for _ in 0..max_swaps {
        let cur = st.j();
        let exact_best = |pairs: &mut dyn Iterator<Item = (usize, usize, Option<f64>)>| {
            let mut best: Option<(f64, usize, usize)> = None;
            for (k, i, known) in pairs {
                if seed.contains(&st.chosen[k]) || !st.may_add(i, Some(st.chosen[k])) {
                    continue;
                }
                let jn = known.unwrap_or_else(|| st.j_swap(k, i));
                if jn < cur * (1.0 - 1e-9) && best.is_none_or(|b| jn < b.0) {
                    best = Some((jn, k, i));
                }
            }
            best
        };
        let all = |st: &State| {
            let m = st.chosen.len();
            (0..m).flat_map(move |k| (0..n).map(move |i| (k, i, None)))
        };
        let best = match screen_swaps(st, seed, cur, &mut bufs) {
            None => exact_best(&mut all(st)),
            Some(free) => {
                // The smallest J surely reached over the admissible swaps
                // (a minimum: the order of the terms does not matter), and
                // the finalists, position by position in candidate order.
                // One pass, as in `run`: the bound only falls and a swap's
                // lower end is at most its upper one (e ≥ 0), so a swap
                // passed over could neither lower the final bound nor come
                // within it; keeping those within the final bound gives the
                // two passes' finalists in the same order.
                let mut ub = cur * (1.0 - 1e-9);
                let mut finalists: Vec<Swap> = Vec::new();
                for (&k, (est, err)) in free.iter().zip(bufs.iter()) {
                    let out = Some(st.chosen[k]);
                    for (i, (&j, &e)) in est.iter().zip(err).enumerate() {
                        if !(j.is_nan() || j - e <= ub) || !st.may_add(i, out) {
                            continue;
                        }
                        if j.is_finite() {
                            ub = f64::min(ub, j + e);
                        }
                        finalists.push((k, i, (j, e)));
                    }
                }
                finalists.retain(|(_, _, (j, e))| j.is_nan() || j - e <= ub);
                match exact_swaps(st, &finalists) {
                    Some(x) => exact_best(&mut x.into_iter()),
                    None => exact_best(&mut all(st)),
                }
            }
        };
        let Some((_, k, i)) = best else {
            break;
        };
        st.remove_at(k);
        st.push(i);
        let last = st.chosen.len() - 1;
        st.chosen.swap(k.min(last), last);
    }
}

/// Position by position, the swap that lowers J the most, two passes at
/// most, until J ≤ `target`. The state must be the exhausted greedy design
/// of the problem `trail` belongs to: the kept checks and swaps are
/// replayed up to this target's stop, then the exchange goes on from the
/// last kept check and keeps its steps (see [`Memo`]).
fn exchange_sequential(st: &mut State, seed: &[usize], target: f64, trail: &mut Trails) {
    for ev in &trail.seq {
        match *ev {
            SeqEvent::Check(cur) if cur <= target => return,
            SeqEvent::Check(_) => {}
            SeqEvent::Swap(k, i) => st.swap_in(k, i),
        }
    }
    let (pass0, k0, improved0) = if !trail.seq_begun {
        trail.seq_begun = true;
        (0, 0, false)
    } else {
        match trail.seq_at {
            None => return,
            Some(at) => {
                // The last kept check is made again (the same J).
                trail.seq.pop();
                at
            }
        }
    };
    let n = st.p.cands.len();
    let (mut pass, mut k, mut improved) = (pass0, k0, improved0);
    while pass < 2 {
        while k < st.chosen.len() {
            if seed.contains(&st.chosen[k]) {
                k += 1;
                continue;
            }
            let cur = st.j();
            trail.seq.push(SeqEvent::Check(cur));
            if cur <= target {
                trail.seq_at = Some((pass, k, improved));
                return;
            }
            let exact_best = |only: &mut dyn Iterator<Item = (usize, Option<f64>)>| {
                let mut best: Option<(f64, usize)> = None;
                for (i, known) in only {
                    if !st.may_add(i, Some(st.chosen[k])) {
                        continue;
                    }
                    let jn = known.unwrap_or_else(|| st.j_swap(k, i));
                    if jn < cur * (1.0 - 1e-9) && best.is_none_or(|b| jn < b.0) {
                        best = Some((jn, i));
                    }
                }
                best
            };
            let best = match screen_swap_at(st, k, cur) {
                None => exact_best(&mut (0..n).map(|i| (i, None))),
                Some(est) => {
                    let ub = est
                        .iter()
                        .filter(|(_, (j, _))| j.is_finite())
                        .map(|(_, (j, e))| j + e)
                        .fold(cur * (1.0 - 1e-9), f64::min);
                    let finalists: Vec<Swap> = est
                        .into_iter()
                        .filter(|(_, (j, e))| j.is_nan() || j - e <= ub)
                        .map(|(i, e)| (k, i, e))
                        .collect();
                    match exact_swaps(st, &finalists) {
                        Some(x) => exact_best(&mut x.into_iter().map(|(_, i, j)| (i, j))),
                        None => exact_best(&mut (0..n).map(|i| (i, None))),
                    }
                }
            };
            if let Some((_, i)) = best {
                st.swap_in(k, i);
                trail.seq.push(SeqEvent::Swap(k, i));
                improved = true;
            }
            k += 1;
        }
        if !improved {
            break;
        }
        pass += 1;
        k = 0;
        improved = false;
    }
    trail.seq_at = None;
}

/// Drop epochs (the costliest first) while J stays ≤ `target`.
fn prune(st: &mut State, seed: &[usize], target: f64) {
    loop {
        let mut order: Vec<usize> = (0..st.chosen.len())
            .filter(|k| !seed.contains(&st.chosen[*k]))
            .collect();
        order.sort_by(|a, b| {
            st.p.cands[st.chosen[*b]]
                .hours
                .total_cmp(&st.p.cands[st.chosen[*a]].hours)
        });
        let Some(k) = order.into_iter().find(|k| st.j_without(*k) <= target) else {
            return;
        };
        st.remove_at(k);
    }
}

/// Swap epochs for cheaper ones while J stays ≤ `target`.
fn exchange_for_hours(st: &mut State, seed: &[usize], target: f64) {
    let n = st.p.cands.len();
    for _ in 0..PASSES {
        let mut improved = false;
        for k in 0..st.chosen.len() {
            if seed.contains(&st.chosen[k]) {
                continue;
            }
            let h_out = st.p.cands[st.chosen[k]].hours;
            let cheaper = |i: usize| st.p.cands[i].hours < h_out * (1.0 - 1e-9);
            // No cheaper candidate (every level's visits cost the same): no
            // swap to weigh.
            if !(0..n).any(cheaper) {
                continue;
            }
            let exact_best = |only: &mut dyn Iterator<Item = (usize, Option<f64>)>| {
                let mut best: Option<(f64, f64, usize)> = None; // hours, j, index
                for (i, known) in only {
                    let h = st.p.cands[i].hours;
                    if h >= h_out * (1.0 - 1e-9) || !st.may_add(i, Some(st.chosen[k])) {
                        continue;
                    }
                    let jn = known.unwrap_or_else(|| st.j_swap(k, i));
                    if jn <= target && best.is_none_or(|b| (h, jn) < (b.0, b.1)) {
                        best = Some((h, jn, i));
                    }
                }
                best
            };
            let best = match screen_swap_at(st, k, st.j()) {
                None => exact_best(&mut (0..n).map(|i| (i, None))),
                Some(est) => {
                    // The fewest hours of a swap surely within the target;
                    // finalists: the swaps that may be within it at no more.
                    let est: Vec<(usize, (f64, f64))> =
                        est.into_iter().filter(|(i, _)| cheaper(*i)).collect();
                    let h_sure = est
                        .iter()
                        .filter(|(_, (j, e))| j.is_finite() && j + e <= target)
                        .map(|(i, _)| st.p.cands[*i].hours)
                        .fold(f64::INFINITY, f64::min);
                    let finalists: Vec<Swap> = est
                        .into_iter()
                        .filter(|(i, (j, e))| {
                            j.is_nan() || (j - e <= target && st.p.cands[*i].hours <= h_sure)
                        })
                        .map(|(i, e)| (k, i, e))
                        .collect();
                    match exact_swaps(st, &finalists) {
                        Some(x) => exact_best(&mut x.into_iter().map(|(_, i, j)| (i, j))),
                        None => exact_best(&mut (0..n).map(|i| (i, None))),
                    }
                }
            };
            if let Some((_, _, i)) = best {
                st.remove_at(k);
                st.push(i);
                let last = st.chosen.len() - 1;
                st.chosen.swap(k.min(last), last);
                improved = true;
            }
        }
        if !improved {
            break;
        }
    }
}

/// The best design of exactly `k` candidates by exhaustive search (every
/// admissible subset): the reference the greedy selection is tested against.
/// Only for small cases (the count of subsets grows as C(n, k)).
pub fn exhaustive(p: Problem, k: usize) -> Option<Design> {
    let n = p.cands.len();
    let mut best: Option<Design> = None;
    let mut idx: Vec<usize> = (0..k).collect();
    if k == 0 || k > n {
        return None;
    }
    loop {
        let ok = {
            let mut slots = std::collections::HashSet::new();
            let mut seasons: std::collections::HashMap<usize, usize> = Default::default();
            idx.iter().all(|i| {
                let c = &p.cands[*i];
                let s = seasons.entry(c.season).or_insert(0);
                *s += 1;
                slots.insert(c.slot) && *s <= p.max_per_season
            })
        };
        if ok {
            let d = evaluate(&p, &idx);
            if best.as_ref().is_none_or(|b| d.j() < b.j()) {
                best = Some(d);
            }
        }
        // Next combination.
        let mut i = k;
        while i > 0 && idx[i - 1] == n - k + i - 1 {
            i -= 1;
        }
        if i == 0 {
            break;
        }
        idx[i - 1] += 1;
        for j in i..k {
            idx[j] = idx[j - 1] + 1;
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Candidates over two years with varied factors, errors and DCR, and
    /// a few that make a normal matrix singular or not finite.
    fn cands() -> Vec<Candidate> {
        let mut v: Vec<Candidate> = (0..40)
            .map(|k| {
                let x = k as f64;
                Candidate {
                    t_yr: 2027.0 + x * 0.05,
                    pf_ra: (x * 0.7).sin(),
                    pf_dec: 0.3 * (x * 1.3).cos(),
                    sigma_mas: 1.0 + 0.1 * (x * 0.37).sin(),
                    dcr_ra_mas: 0.2 * (x * 0.9).cos(),
                    dcr_dec_mas: -0.1 * (x * 0.4).sin(),
                    hours: 0.5,
                    slot: k,
                    season: k / 8,
                }
            })
            .collect();
        let mut zero = v[3].clone();
        zero.sigma_mas = 0.0;
        let mut nan = v[5].clone();
        nan.pf_ra = f64::NAN;
        let mut neg = v[7].clone();
        neg.sigma_mas = -0.0;
        // In a group of four (the AVX2 loop's second) and again at the end
        // (the last, shorter group).
        v.splice(5..5, [zero.clone(), nan.clone(), neg.clone()]);
        v.extend([zero, nan, neg]);
        v
    }

    #[test]
    fn every_exact_j_at_once_is_each_ones_to_the_bit() {
        // j_with_all promises State::j_with's numbers bit for bit, on
        // designs of none to eight epochs (the prior-dominated ones the
        // greedy search meets first) and on candidates whose matrix is
        // singular or not finite.
        let cands = cands();
        let p = Problem {
            cands: &cands,
            t_ref: 2027.9,
            max_per_season: 8,
        };
        let pre = Pre::of(&p);
        let mut st = State::new(p, &pre);
        let mut js = Vec::new();
        for add in [0, 11, 22, 33, 1, 17, 29, 38, 9] {
            j_with_all(&st.acc, &pre, &mut js);
            for (i, j) in js.iter().enumerate() {
                assert_eq!(
                    j.to_bits(),
                    st.j_with(i).to_bits(),
                    "{} epochs, candidate {i}",
                    st.chosen.len()
                );
            }
            j_with_body(&st.acc, &pre, &mut js, 0);
            for (i, j) in js.iter().enumerate() {
                assert_eq!(
                    j.to_bits(),
                    st.j_with(i).to_bits(),
                    "plain loop, candidate {i}"
                );
            }
            st.push(add);
        }
        // A design without the prior's help: one epoch's matrix alone is
        // singular, so every J is infinite, as State::j_with says.
        let mut bare = st.acc;
        bare.n = [[0.0; 5]; 5];
        j_with_all(&bare, &pre, &mut js);
        for (i, j) in js.iter().enumerate() {
            let mut a = bare;
            a.add(&cands[i], p.t_ref, 1.0);
            assert_eq!(
                j.to_bits(),
                j_of(a.score()).to_bits(),
                "bare, candidate {i}"
            );
            assert!(j.is_infinite(), "{i}");
        }
    }

    #[test]
    fn estimates_of_the_admissible_runs_are_every_estimates_to_the_bit() {
        // j_plus_runs promises j_plus_all's numbers on the candidates of its
        // runs (NaN elsewhere), and admissible_runs lists exactly the
        // candidates may_add admits: the searches that ask only for those
        // see the numbers, finalists and choices of the full screen. Cap 3
        // a season so that seasons fill up as the design grows.
        let cands = cands();
        let p = Problem {
            cands: &cands,
            t_ref: 2027.9,
            max_per_season: 3,
        };
        let pre = Pre::of(&p);
        let mut st = State::new(p, &pre);
        let (mut all_est, mut all_err) = (Vec::new(), Vec::new());
        let (mut est, mut err, mut runs) = (Vec::new(), Vec::new(), Vec::new());
        for add in [0, 11, 22, 33, 1, 17, 29, 38, 9, 2, 12, 24, 41] {
            if st.may_add(add, None) {
                st.push(add);
            }
            let Some(base) = Base::of(&st.acc) else {
                continue;
            };
            base.j_plus_all(&pre, &mut all_est, &mut all_err);
            for freed in std::iter::once(None).chain(st.chosen.iter().map(|k| Some(*k))) {
                admissible_runs(&st, freed, &mut runs);
                let listed: Vec<usize> = runs.iter().flat_map(|&(a, b)| a..b).collect();
                let admitted: Vec<usize> =
                    (0..cands.len()).filter(|i| st.may_add(*i, freed)).collect();
                assert_eq!(
                    listed,
                    admitted,
                    "{} epochs, freed {freed:?}",
                    st.chosen.len()
                );
                assert!(runs.windows(2).all(|w| w[0].1 < w[1].0), "maximal runs");
                base.j_plus_runs(&pre, &runs, &mut est, &mut err);
                assert_eq!(est.len(), cands.len());
                for i in 0..cands.len() {
                    if admitted.contains(&i) {
                        assert_eq!(est[i].to_bits(), all_est[i].to_bits(), "est {i}");
                        assert_eq!(err[i].to_bits(), all_err[i].to_bits(), "err {i}");
                    } else {
                        assert!(est[i].is_nan() && err[i].is_nan(), "{i} left out");
                    }
                }
            }
        }
        assert!(st.chosen.len() >= SCREEN_MIN_EPOCHS + 3);
        // Full seasons leave candidates out.
        admissible_runs(&st, None, &mut runs);
        let listed: usize = runs.iter().map(|&(a, b)| b - a).sum();
        assert!(listed < cands.len() - st.chosen.len(), "{listed}");
    }

    /// A small generator for the random problems below (64-bit linear
    /// congruential, Knuth's MMIX constants; from memory).
    struct Lcg(u64);

    impl Lcg {
        fn next(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (self.0 >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    /// Candidates of a random problem: nights over two to four years, one
    /// to three instants a night, seasons of about half a year.
    fn random_cands(g: &mut Lcg) -> Vec<Candidate> {
        let nights = 20 + (g.next() * 120.0) as usize;
        let years = 2.0 + 2.0 * g.next();
        let mut v = Vec::new();
        for k in 0..nights {
            let t = years * k as f64 / nights as f64;
            for _ in 0..1 + (g.next() * 3.0) as usize {
                let ph = std::f64::consts::TAU * (t + 0.01 * g.next());
                v.push(Candidate {
                    t_yr: 2027.0 + t,
                    pf_ra: ph.sin() * (0.6 + 0.4 * g.next()),
                    pf_dec: 0.4 * ph.cos() * g.next(),
                    sigma_mas: 0.5 + 2.0 * g.next(),
                    dcr_ra_mas: 0.3 * (g.next() - 0.5),
                    dcr_dec_mas: 0.2 * (g.next() - 0.5),
                    hours: 0.25 + (g.next() * 3.0).floor() * 0.25,
                    slot: k,
                    season: (2.0 * t) as usize,
                });
            }
        }
        v
    }
    #[test]
    fn dense_numbers_are_ranks_among_the_distinct_values() {
        // In order (one pass) or not (sorted), each key becomes the rank
        // of its value among the distinct values.
        let mut g = Lcg(3);
        for case in 0..200 {
            let n = (g.next() * 30.0) as usize;
            let mut keys: Vec<usize> = (0..n).map(|_| (g.next() * 12.0) as usize * 7).collect();
            if case % 2 == 0 {
                keys.sort_unstable();
            }
            let cands: Vec<Candidate> = keys
                .iter()
                .map(|k| Candidate {
                    t_yr: 2027.0,
                    pf_ra: 0.0,
                    pf_dec: 0.0,
                    sigma_mas: 1.0,
                    dcr_ra_mas: 0.0,
                    dcr_dec_mas: 0.0,
                    hours: 1.0,
                    slot: *k,
                    season: 0,
                })
                .collect();
            let mut distinct = keys.clone();
            distinct.sort_unstable();
            distinct.dedup();
            let want: Vec<usize> = keys
                .iter()
                .map(|k| distinct.iter().position(|d| d == k).unwrap())
                .collect();
            assert_eq!(
                dense(&cands, |c| c.slot),
                (want, distinct.len()),
                "{keys:?}"
            );
        }
    }

    #[test]
    fn screened_searches_choose_what_exact_searches_choose() {
        // Screening only skips the exact J of candidates that cannot be a
        // step's choice (see SCREEN_REL), so a search with it, from three
        // chosen epochs on (SCREEN_MIN_EPOCHS), ends with the design the
        // same search without it ends with: the same epochs, the same bits.
        let mut g = Lcg(7);
        let mut screened_steps = 0;
        for case in 0..60 {
            let cands = random_cands(&mut g);
            let t_ref = cands[cands.len() / 2].t_yr;
            let p = Problem {
                cands: &cands,
                t_ref,
                max_per_season: 2 + (g.next() * 6.0) as usize,
            };
            let seed: Vec<usize> = if g.next() < 0.3 { vec![0] } else { Vec::new() };
            let count = 4 + (g.next() * 16.0) as usize;
            let full = select(p, &seed, Stop::Count(count));
            screened_steps += full.chosen.len().saturating_sub(SCREEN_MIN_EPOCHS);
            // Goals from half the J this count reaches to three times it:
            // some met early, some after the greedy steps, some not at all.
            let goals = [full.j() * 0.5, full.j(), full.j() * (1.0 + 2.0 * g.next())];
            let stops: Vec<Stop> = std::iter::once(Stop::Count(count))
                .chain(goals.iter().map(|j| Stop::Target(*j)))
                .collect();
            for stop in stops {
                let screened = select(p, &seed, stop);
                SCREEN_FROM.with(|c| c.set(usize::MAX));
                let exact = select(p, &seed, stop);
                SCREEN_FROM.with(|c| c.set(SCREEN_MIN_EPOCHS));
                assert_eq!(screened.chosen, exact.chosen, "case {case} {stop:?}");
                assert_eq!(screened.var_mas2.to_bits(), exact.var_mas2.to_bits());
                assert_eq!(screened.bias_mas.to_bits(), exact.bias_mas.to_bits());
                assert_eq!(screened.hours.to_bits(), exact.hours.to_bits());
            }
        }
        // The screen did run (designs past its first epochs).
        assert!(screened_steps > 300, "{screened_steps}");
    }

    #[test]
    fn every_exact_j_at_once_is_each_ones_on_random_designs() {
        // j_with_all leaves out the terms at A's structural zeros (see
        // NONZERO); on random problems, designs grown and shrunk (removals
        // make entries cancel, some to zero), and candidates with extreme or
        // not finite values (w·dt overflowing, w = 0, w = ∞, dt = 0, factors
        // 0 or NaN), its J is State::j_with's bit for bit.
        let mut g = Lcg(41);
        for case in 0..200 {
            let mut cands = random_cands(&mut g);
            let t_ref = cands[(g.next() * cands.len() as f64) as usize].t_yr;
            for c in cands.iter_mut() {
                match (g.next() * 40.0) as usize {
                    0 => c.sigma_mas = 1e-150,
                    1 => c.sigma_mas = 1e-200,
                    2 => c.sigma_mas = f64::INFINITY,
                    3 => c.t_yr = t_ref,
                    4 => c.pf_ra = 0.0,
                    5 => c.pf_dec = -0.0,
                    6 => c.pf_dec = f64::NAN,
                    7 => c.t_yr = 1e300,
                    8 => c.dcr_ra_mas = f64::INFINITY,
                    _ => {}
                }
            }
            let p = Problem {
                cands: &cands,
                t_ref,
                max_per_season: 1 + (g.next() * 4.0) as usize,
            };
            let pre = Pre::of(&p);
            let mut st = State::new(p, &pre);
            let mut js = Vec::new();
            for step in 0..12 {
                j_with_all(&st.acc, &pre, &mut js);
                let mut plain = vec![0.0; cands.len()];
                j_with_body(&st.acc, &pre, &mut plain, 0);
                for i in 0..cands.len() {
                    let want = st.j_with(i).to_bits();
                    assert_eq!(js[i].to_bits(), want, "case {case} step {step} cand {i}");
                    assert_eq!(
                        plain[i].to_bits(),
                        want,
                        "plain: case {case} step {step} {i}"
                    );
                }
                if g.next() < 0.3 && !st.chosen.is_empty() {
                    st.remove_at((g.next() * st.chosen.len() as f64) as usize);
                } else {
                    let i = (g.next() * cands.len() as f64) as usize;
                    if st.may_add(i, None) {
                        st.push(i);
                    }
                }
            }
        }
    }
}
