//! Permutation p-value of the two-sample T².
//!
//! # Formula
//! `p = (1 + #{T²* ≥ T²}) / (1 + B)` over `B` random relabellings of the units (seeded).
//! The total cross-product matrix `T` of the pooled units does not change under relabelling,
//! and T² is an increasing function of `dᵀ T⁻¹ d`. With all units centred on their grand mean
//! and `T = L Lᵀ`, `dᵀ T⁻¹ d` is proportional to `‖L⁻¹ s‖²`, `s` the sum of the units given to
//! the smaller lot: each permutation costs one group sum and one small triangular solve. Permutation `k` draws
//! its relabelling from its own seeded stream, so the p-value does not depend on how the work
//! is split across threads. Exchangeability under the null is assumed: with unequal
//! covariance matrices the permutation test is not exact for equal means (common practice:
//! read it together with the unequal-covariance test).

use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, AtomicU8, AtomicUsize, Ordering};

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use super::hotelling::{Pooled, two_sample};
use super::moments::LotMoments;

/// Result of the permutation test (record key `permutation`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PermutationResult {
    /// Relabellings asked for (`B`, the most that are drawn).
    pub permutations: usize,
    /// Seed of the draws.
    pub seed: u64,
    /// Relabellings drawn whose T² reached the observed one.
    pub at_least_observed: usize,
    /// The p-value: `(1 + at_least_observed) / (1 + drawn)` when every relabelling allowed was
    /// drawn, Besag & Clifford's `h / drawn` when their rule stopped the draws; when one of
    /// Gandy's boundaries stopped them, the end of [`p_interval`](Self::p_interval) nearer
    /// alpha (so that `p_value < alpha` exactly when the decision is "below alpha").
    pub p_value: f64,
    /// Relabellings drawn (0 in a result made before sequential stopping: then all
    /// `permutations` were drawn).
    #[serde(default)]
    pub drawn: usize,
    /// What ended the draws.
    #[serde(default)]
    pub stopped_by: StoppedBy,
    /// When a boundary stopped the draws: the p-value as an interval (Clopper–Pearson on the
    /// draws made, `risk` in each tail), wholly below or wholly above alpha.
    #[serde(default)]
    pub p_interval: Option<[f64; 2]>,
    /// Why the draws stopped, in one plain sentence.
    #[serde(default)]
    pub why: String,
}

impl PermutationResult {
    /// Relabellings drawn (results from before sequential stopping drew all of them).
    pub fn draws(&self) -> usize {
        if self.drawn == 0 {
            self.permutations
        } else {
            self.drawn
        }
    }
}

/// What ended the relabellings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum StoppedBy {
    /// Sequential stopping was off: all `B` relabellings were drawn.
    #[default]
    All,
    /// Besag & Clifford: the `h`-th relabelling whose T² reached the observed one.
    Hits,
    /// Gandy's lower boundary: the p-value is below alpha.
    LowerBoundary,
    /// Gandy's upper boundary: the p-value is above alpha.
    UpperBoundary,
    /// Sequential stopping was on, but no rule stopped the draws within `B − 1`.
    Limit,
}

/// Sequential stopping of the relabellings (record key `settings.sequential`).
///
/// # Rule (how the two published rules combine)
/// Relabellings are drawn in their numbered order, `l = 1, 2, …`, with `g` the number so far
/// whose T² reached the observed one. After each draw, in this order:
/// 1. Besag & Clifford (1991, Biometrika 78:301), when `hits > 0`: at `g = hits`, stop with
///    `p = hits / l`.
/// 2. Gandy (2009, J. Am. Stat. Assoc. 104:1504), when `0 < risk < 1`: at `g ≤ L_l` stop with
///    "p below alpha"; at `g ≥ U_l` stop with "p above alpha" only when rule 1 is off (see
///    [`Boundaries`]). The p-value is then reported as the Clopper–Pearson interval of `g` in
///    `l` with `risk` in each tail.
/// 3. At `l = B − 1` stop with Besag & Clifford's `p = (g + 1) / B`, which is the ordinary
///    `(1 + g) / (1 + draws)` for the `B − 1` draws made.
///
/// The first rule met stops the draws. The two published rules share the work: Gandy's lower
/// boundary settles clear shifts (a pair with no hits stops after about 175 draws at alpha
/// 0.05, ε = 0.001), Besag & Clifford's rule gives large p-values as a point after about `h/p`
/// draws. Gandy's upper boundary would cross a few draws before the `h`-th hit for large p and
/// report only an interval above alpha, so with rule 1 on it does not stop the draws (the
/// boundaries are still computed as in the paper). Gandy's bound on the resampling risk (the
/// chance that the decision differs from the one all possible relabellings would give) holds
/// for the decisions his boundaries make (a path that passes the unused upper boundary ends at
/// its `h`-th hit long before it could come back down to the lower one; the simulation in the
/// tests checks the combined rule); a Besag–Clifford stop is a p-value of `h` hits'
/// precision (relative Monte Carlo error about `1/√h`), exact as a test at any level, not a
/// decision with a bounded resampling risk: near alpha, raise `h` for a firmer decision.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Sequential {
    /// Besag & Clifford's `h`: stop at the `h`-th relabelling whose T² reaches the observed
    /// one (0: this rule is off).
    pub hits: usize,
    /// Gandy's `ε`: the resampling risk of the boundaries' decision at alpha (0: the
    /// boundaries are off).
    pub risk: f64,
}

/// Besag & Clifford's `h` by default.
pub const DEFAULT_HITS: usize = 10;
/// Gandy's `ε` by default.
pub const DEFAULT_RISK: f64 = 1e-3;
/// The constant `k` of Gandy's spending sequence `ε_n = ε · n / (n + k)`.
pub const SPENDING_K: f64 = 1000.0;

impl Default for Sequential {
    fn default() -> Self {
        Sequential {
            hits: DEFAULT_HITS,
            risk: DEFAULT_RISK,
        }
    }
}

/// Gandy's (2009) stopping boundaries for deciding whether a Monte Carlo p-value is below
/// `alpha`, computed step by step.
///
/// # Definitions (from the paper)
/// `S_n` is the number of hits (relabellings reaching the observed statistic) in the first
/// `n` draws, `τ` the first `n` with `S_n ≥ U_n` or `S_n ≤ L_n`, `P_α` the probability when each
/// draw hits with probability `α`, and `ε_n` a non-decreasing spending sequence with
/// `ε_n → ε`; the paper suggests `ε_n = ε · n / (n + k)`, `k = 1000`. Then
///
/// `U_n = min { j : P_α(τ ≥ n, S_n ≥ j) + P_α(τ < n, S_τ ≥ U_τ) ≤ ε_n }`,
/// `L_n = max { j : P_α(τ ≥ n, S_n ≤ j) + P_α(τ < n, S_τ ≤ L_τ) ≤ ε_n }`,
///
/// stopping at `U` decides "p above alpha", at `L` "p below alpha"; for every true p the
/// chance of the wrong decision is at most `ε`. The recursion carries the distribution of
/// `S_n` on the paths not yet stopped (one convolution with a Bernoulli(α) step per draw) and
/// the probability already spent at each boundary, as in the paper.
///
/// # What is not from the paper
/// The paper's text was not at hand when this was written: the definitions above are as
/// recalled from it and implemented from those definitions (the properties they imply, the
/// risk spent never exceeding `ε_n` and the simulated risk staying below `ε`, are checked in
/// the tests). The interval reported at a stop (Clopper–Pearson with `ε` in each tail) is
/// this program's choice, not the paper's.
#[derive(Debug, Clone)]
pub struct Boundaries {
    alpha: f64,
    risk: f64,
    /// Draws so far (`n`).
    n: usize,
    /// `P_α(τ > n, S_n = first + i)` for the continuation region `L_n < j < U_n`.
    cont: Vec<f64>,
    /// The `j` of `cont[0]`.
    first: i64,
    /// `P_α(τ ≤ n, S_τ ≥ U_τ)` and `P_α(τ ≤ n, S_τ ≤ L_τ)`.
    spent: [f64; 2],
    /// `(L_n, U_n)`.
    last: (i64, i64),
}

impl Boundaries {
    /// Boundaries for a decision at `alpha` with resampling risk `risk`.
    pub fn new(alpha: f64, risk: f64) -> Self {
        Boundaries {
            alpha,
            risk,
            n: 0,
            cont: vec![1.0],
            first: 0,
            spent: [0.0; 2],
            last: (-1, 1),
        }
    }

    /// `ε_n = ε · n / (n + k)`.
    pub fn spending(&self, n: usize) -> f64 {
        self.risk * n as f64 / (n as f64 + SPENDING_K)
    }

    /// Draws the boundaries are computed for.
    pub fn n(&self) -> usize {
        self.n
    }

    /// The probabilities spent so far at the upper and the lower boundary under `p = alpha`.
    pub fn spent(&self) -> [f64; 2] {
        self.spent
    }

    /// Advances by one draw and returns `(L_n, U_n)` for the new `n`.
    pub fn step(&mut self) -> (i64, i64) {
        let n = self.n + 1;
        let a = self.alpha;
        let mut pre = vec![0.0; self.cont.len() + 1];
        for (i, &w) in self.cont.iter().enumerate() {
            pre[i] += w * (1.0 - a);
            pre[i + 1] += w * a;
        }
        // pre[i] = P_α(τ ≥ n, S_n = first + i).
        let e = self.spending(n);
        // U_n: the smallest j whose upper tail (summed from the top, small terms first) with
        // what is spent stays within ε_n.
        let mut top = pre.len();
        let mut tail = 0.0;
        while top > 0 && self.spent[0] + tail + pre[top - 1] <= e {
            tail += pre[top - 1];
            top -= 1;
        }
        // L_n: the largest j whose lower tail with what is spent stays within ε_n.
        let mut bottom = 0;
        let mut head = 0.0;
        while bottom < top && self.spent[1] + head + pre[bottom] <= e {
            head += pre[bottom];
            bottom += 1;
        }
        self.spent[0] += tail;
        self.spent[1] += head;
        let upper = self.first + top as i64;
        let lower = self.first + bottom as i64 - 1;
        self.cont = pre[bottom..top].to_vec();
        self.first += bottom as i64;
        self.n = n;
        self.last = (lower, upper);
        self.last
    }
}

/// Applies the stopping rules of [`Sequential`] to hits given in draw order.
#[derive(Debug, Clone)]
pub struct Sequencer {
    permutations: usize,
    limit: usize,
    hits_needed: usize,
    boundaries: Option<Boundaries>,
    /// `(L_n, U_n)` for `n = 1, 2, …` as far as computed (they do not depend on the draws).
    table: Vec<(i64, i64)>,
    risk: f64,
    alpha: f64,
    drawn: usize,
    hits: usize,
    stopped: Option<StoppedBy>,
}

impl Sequencer {
    /// Rules for `permutations` relabellings (`B`), sequential stopping as given (`None`:
    /// draw all `B`), deciding at `alpha`.
    pub fn new(permutations: usize, sequential: Option<&Sequential>, alpha: f64) -> Self {
        let on = sequential.filter(|_| permutations >= 2);
        let risk = on.map_or(0.0, |s| s.risk);
        let decides = risk > 0.0 && risk < 1.0 && alpha > 0.0 && alpha < 1.0;
        Sequencer {
            permutations,
            limit: if on.is_some() {
                permutations - 1
            } else {
                permutations
            },
            hits_needed: on.map_or(0, |s| s.hits),
            boundaries: decides.then(|| Boundaries::new(alpha, risk)),
            table: Vec::new(),
            risk,
            alpha,
            drawn: 0,
            hits: 0,
            stopped: if permutations == 0 {
                Some(StoppedBy::All)
            } else {
                None
            },
        }
    }

    /// The most draws the rules allow.
    pub fn limit(&self) -> usize {
        self.limit
    }

    /// Draws taken so far.
    pub fn drawn(&self) -> usize {
        self.drawn
    }

    /// What stopped the draws (`None`: not stopped yet).
    pub fn stopped(&self) -> Option<StoppedBy> {
        self.stopped
    }

    /// Gandy's `(L_n, U_n)` (computed once, then read from the table).
    fn bounds(&mut self, n: usize) -> Option<(i64, i64)> {
        let b = self.boundaries.as_mut()?;
        while self.table.len() < n {
            self.table.push(b.step());
        }
        Some(self.table[n - 1])
    }

    /// Computes Gandy's boundaries for the first `n` draws ahead (they do not depend on the
    /// draws; [`restart`](Self::restart) keeps them).
    pub fn precompute(&mut self, n: usize) {
        if n > 0 {
            let _ = self.bounds(n);
        }
    }

    /// Starts again with no draws, keeping the boundaries computed so far (for simulations).
    pub fn restart(&mut self) {
        self.drawn = 0;
        self.hits = 0;
        self.stopped = if self.permutations == 0 {
            Some(StoppedBy::All)
        } else {
            None
        };
    }

    /// Takes the next draw (whether its statistic reached the observed one); true when the
    /// draws stop here. Draws after a stop are ignored.
    pub fn push(&mut self, hit: bool) -> bool {
        if self.stopped.is_some() {
            return true;
        }
        self.drawn += 1;
        self.hits += usize::from(hit);
        let g = self.hits as i64;
        if self.hits_needed > 0 && self.hits == self.hits_needed {
            self.stopped = Some(StoppedBy::Hits);
        } else if let Some((lower, upper)) = self.bounds(self.drawn) {
            if g <= lower {
                self.stopped = Some(StoppedBy::LowerBoundary);
            } else if g >= upper && self.hits_needed == 0 {
                // With Besag & Clifford's rule on, large p-values are theirs to stop (see
                // [`Sequential`]): the upper boundary stops the draws only without it.
                self.stopped = Some(StoppedBy::UpperBoundary);
            }
        }
        if self.stopped.is_none() && self.drawn >= self.limit {
            self.stopped = Some(if self.limit < self.permutations {
                StoppedBy::Limit
            } else {
                StoppedBy::All
            });
        }
        self.stopped.is_some()
    }

    /// The result after the draws (the rules as they stand when the draws end early).
    pub fn result(&self, seed: u64) -> PermutationResult {
        let (l, g) = (self.drawn, self.hits);
        let stopped = self.stopped.unwrap_or(StoppedBy::All);
        let (p_value, p_interval, why) = match stopped {
            StoppedBy::All => (
                (1 + g) as f64 / (1 + l) as f64,
                None,
                format!(
                    "sequential stopping was off, so all {l} relabellings were drawn; {g} \
                     reached the observed T²"
                ),
            ),
            StoppedBy::Limit => (
                (1 + g) as f64 / (1 + l) as f64,
                None,
                format!(
                    "no stopping rule was met within {l} relabellings (one fewer than the {} \
                     asked for); {g} reached the observed T², so p = (1 + {g})/{} (Besag & \
                     Clifford 1991)",
                    self.permutations, self.permutations
                ),
            ),
            StoppedBy::Hits => (
                g as f64 / l as f64,
                None,
                format!(
                    "the {} relabelling whose T² reached the observed one was draw {l}, so p = \
                     {g}/{l} (Besag & Clifford 1991)",
                    ordinal(g)
                ),
            ),
            StoppedBy::LowerBoundary | StoppedBy::UpperBoundary => {
                let iv = clopper_pearson(g, l, self.risk);
                let below = stopped == StoppedBy::LowerBoundary;
                (
                    if below { iv[1] } else { iv[0] },
                    Some(iv),
                    format!(
                        "{g} of {l} relabellings reached the observed T², {} Gandy's (2009) {} \
                         boundary for alpha {}, so p is {} alpha (the chance that all possible \
                         relabellings would decide otherwise is at most {})",
                        if below { "at or below" } else { "at or above" },
                        if below { "lower" } else { "upper" },
                        self.alpha,
                        if below { "below" } else { "above" },
                        self.risk
                    ),
                )
            }
        };
        PermutationResult {
            permutations: self.permutations,
            seed,
            at_least_observed: g,
            p_value,
            drawn: l,
            stopped_by: stopped,
            p_interval,
            why,
        }
    }
}

/// "1st", "2nd", "10th", "22nd".
fn ordinal(k: usize) -> String {
    let suffix = match (k % 10, k % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{k}{suffix}")
}

/// Clopper–Pearson (1934) interval of a binomial proportion, `g` hits in `l`, with `tail` in
/// each tail: the Beta(g, l − g + 1) lower `tail` point and the Beta(g + 1, l − g) upper one.
pub fn clopper_pearson(g: usize, l: usize, tail: f64) -> [f64; 2] {
    let (gf, lf) = (g as f64, l as f64);
    let lower = if g == 0 {
        0.0
    } else {
        super::dist::beta_isf(1.0 - tail, gf, lf - gf + 1.0)
    };
    let upper = if g >= l {
        1.0
    } else {
        super::dist::beta_isf(tail, gf + 1.0, lf - gf)
    };
    [lower, upper]
}

/// SplitMix64: a small, fast, well-mixed generator (Steele, Lea & Flood 2014).
#[derive(Debug, Clone)]
pub struct SplitMix64(pub u64);

impl SplitMix64 {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform integer in `0..bound` (Lemire's multiply-shift; the bias is below 2⁻³² for
    /// any lot size, far under the Monte Carlo error).
    pub fn below(&mut self, bound: usize) -> usize {
        ((u128::from(self.next_u64()) * bound as u128) >> 64) as usize
    }

    /// The stream of permutation `k` under `seed`.
    pub fn for_permutation(seed: u64, k: usize) -> Self {
        let mut s = SplitMix64(seed ^ (k as u64).wrapping_mul(0xD1B5_4A32_D192_ED03));
        s.next_u64();
        s
    }
}

/// Chooses `m` of `0..idx.len()` into `idx[..m]` by a partial Fisher–Yates shuffle, recording
/// the swaps so they can be undone.
fn draw(idx: &mut [usize], m: usize, rng: &mut SplitMix64, swaps: &mut Vec<(usize, usize)>) {
    swaps.clear();
    let n = idx.len();
    for i in 0..m {
        let j = i + rng.below(n - i);
        idx.swap(i, j);
        swaps.push((i, j));
    }
}

fn undo(idx: &mut [usize], swaps: &[(usize, usize)]) {
    for &(i, j) in swaps.iter().rev() {
        idx.swap(i, j);
    }
}

/// Permutation p-value for two lots of unit data, with sequential stopping when `sequential`
/// is given (see [`Sequential`]; `alpha` is the level Gandy's boundaries decide at).
/// `keep_going` receives the fraction done and returns false to cancel (then `None`).
///
/// The units are centred on their grand mean once, in a single row-major copy; the total
/// cross-product matrix `T = L Lᵀ` is factored once. A relabelling's statistic is
/// `‖L⁻¹ s‖²` with `s` the sum of the units given to the smaller lot — whitening is linear,
/// so whitening the sum equals summing whitened units, without a second copy of the data.
pub fn permutation_test(
    centred: [&DMatrix<f64>; 2],
    d: &DVector<f64>,
    permutations: usize,
    seed: u64,
    sequential: Option<&Sequential>,
    alpha: f64,
    keep_going: &(dyn Fn(f64) -> bool + Sync),
) -> Option<PermutationResult> {
    let (n1, n2, p) = sizes([centred[0].shape(), centred[1].shape()], permutations, d)?;
    let mut rows = vec![0.0; (n1 + n2) * p];
    fill_rows(&mut rows, centred[0], 0, n1, n2, d);
    fill_rows(&mut rows, centred[1], 1, n1, n2, d);
    test_rows(
        &rows,
        n1,
        n2,
        p,
        permutations,
        seed,
        sequential,
        alpha,
        keep_going,
    )
}

/// As [`permutation_test`], consuming the centred units: each lot's matrix is released as
/// soon as its rows are in the row-major copy, so memory never holds both whole copies.
pub fn permutation_test_owned(
    centred: [DMatrix<f64>; 2],
    d: &DVector<f64>,
    permutations: usize,
    seed: u64,
    sequential: Option<&Sequential>,
    alpha: f64,
    keep_going: &(dyn Fn(f64) -> bool + Sync),
) -> Option<PermutationResult> {
    let (n1, n2, p) = sizes([centred[0].shape(), centred[1].shape()], permutations, d)?;
    let mut rows = vec![0.0; (n1 + n2) * p];
    let [x, y] = centred;
    fill_rows(&mut rows, &x, 0, n1, n2, d);
    drop(x);
    fill_rows(&mut rows, &y, 1, n1, n2, d);
    drop(y);
    test_rows(
        &rows,
        n1,
        n2,
        p,
        permutations,
        seed,
        sequential,
        alpha,
        keep_going,
    )
}

/// The lots' sizes and the number of characteristics, or `None` when there is nothing to test.
fn sizes(
    shapes: [(usize, usize); 2],
    permutations: usize,
    d: &DVector<f64>,
) -> Option<(usize, usize, usize)> {
    let ((n1, p), (n2, _)) = (shapes[0], shapes[1]);
    (n1 > 0 && n2 > 0 && p > 0 && permutations > 0 && d.len() == p).then_some((n1, n2, p))
}

/// Writes lot `g`'s centred units into the row-major copy of all units, centred on the grand
/// mean: each lot's units moved by its mean's distance from the grand mean (+n2/N·d for the
/// first lot, −n1/N·d for the second).
fn fill_rows(
    rows: &mut [f64],
    lot: &DMatrix<f64>,
    g: usize,
    n1: usize,
    n2: usize,
    d: &DVector<f64>,
) {
    let n = n1 + n2;
    let p = lot.ncols();
    let (w1, w2) = (n2 as f64 / n as f64, n1 as f64 / n as f64);
    let first = if g == 0 { 0 } else { n1 };
    for k in 0..p {
        let shift = if g == 0 { w1 * d[k] } else { -w2 * d[k] };
        for (i, v) in lot.column(k).iter().enumerate() {
            rows[(first + i) * p + k] = v + shift;
        }
    }
}

/// The permutation test on the row-major copy of all units (`n1` of the first lot, then `n2`).
#[allow(clippy::too_many_arguments)]
fn test_rows(
    rows: &[f64],
    n1: usize,
    n2: usize,
    p: usize,
    permutations: usize,
    seed: u64,
    sequential: Option<&Sequential>,
    alpha: f64,
    keep_going: &(dyn Fn(f64) -> bool + Sync),
) -> Option<PermutationResult> {
    let n = n1 + n2;
    // Total cross-products, on the correlation scale for a well-conditioned factor.
    let mut total = DMatrix::<f64>::zeros(p, p);
    for r in rows.chunks_exact(p) {
        for a in 0..p {
            for b in 0..=a {
                total[(a, b)] += r[a] * r[b];
            }
        }
    }
    for a in 0..p {
        for b in 0..a {
            total[(b, a)] = total[(a, b)];
        }
    }
    let sd: Vec<f64> = (0..p).map(|k| total[(k, k)].sqrt()).collect();
    if sd.iter().any(|&v| !super::positive(v)) {
        return None;
    }
    let corr = DMatrix::from_fn(p, p, |a, b| total[(a, b)] / (sd[a] * sd[b]));
    let l = nalgebra::Cholesky::new(corr)?.l();
    let stat = |s: &[f64], w: &mut [f64]| -> f64 {
        // ‖L⁻¹ D⁻¹ s‖² by forward substitution.
        for a in 0..p {
            let mut v = s[a] / sd[a];
            for b in 0..a {
                v -= l[(a, b)] * w[b];
            }
            w[a] = v / l[(a, a)];
        }
        w.iter().map(|v| v * v).sum()
    };
    // Sum over the smaller lot: with the grand mean removed, the other lot's sum is −s.
    let (m, first_small) = if n1 <= n2 { (n1, true) } else { (n2, false) };
    let observed = {
        let range = if first_small { 0..n1 } else { n1..n };
        let mut s = vec![0.0; p];
        for r in range {
            for (acc, v) in s.iter_mut().zip(&rows[r * p..(r + 1) * p]) {
                *acc += v;
            }
        }
        stat(&s, &mut vec![0.0; p])
    };
    // Ties within rounding count as reaching the observed value.
    let threshold = observed * (1.0 - 1e-12);
    let mut rules = Sequencer::new(permutations, sequential, alpha);
    let hit = |k: usize, scratch: &mut Scratch| -> bool {
        let Scratch { idx, swaps, s, w } = scratch;
        let mut rng = SplitMix64::for_permutation(seed, k);
        draw(idx, m, &mut rng, swaps);
        s.iter_mut().for_each(|v| *v = 0.0);
        for &r in &idx[..m] {
            for (acc, v) in s.iter_mut().zip(&rows[r * p..(r + 1) * p]) {
                *acc += v;
            }
        }
        undo(idx, swaps);
        stat(s, w) >= threshold
    };
    let scratch = || Scratch {
        idx: (0..n).collect(),
        swaps: Vec::with_capacity(m),
        s: vec![0.0; p],
        w: vec![0.0; p],
    };
    drive(&mut rules, threads(), &scratch, &hit, keep_going)?;
    Some(rules.result(seed))
}

/// One thread's working memory for drawing relabellings.
struct Scratch {
    idx: Vec<usize>,
    swaps: Vec<(usize, usize)>,
    s: Vec<f64>,
    w: Vec<f64>,
}

/// Threads for the relabellings (both cores, at most 8).
fn threads() -> usize {
    std::thread::available_parallelism()
        .map_or(1, |c| c.get())
        .clamp(1, 8)
}

/// Draws handed to a thread at a time.
const CHUNK: usize = 8;

/// Evaluates numbered draws `0, 1, …` on `threads` threads and feeds their hits to `rules` in
/// draw order until the rules stop. Threads take draws in chunks; whichever thread completes
/// the next draws in order hands them to the rules (under a lock), so the draws the rules see,
/// and so the result, do not depend on the number of threads or on their timing (draws
/// evaluated past the stop are ignored). `None` when `keep_going` returns false.
fn drive<S>(
    rules: &mut Sequencer,
    threads: usize,
    scratch: &(dyn Fn() -> S + Sync),
    hit: &(dyn Fn(usize, &mut S) -> bool + Sync),
    keep_going: &(dyn Fn(f64) -> bool + Sync),
) -> Option<()> {
    let limit = rules.limit();
    if rules.stopped().is_some() {
        return Some(());
    }
    // 0: not evaluated yet, 1: below the observed T², 2: reached it.
    let results: Vec<AtomicU8> = (0..limit).map(|_| AtomicU8::new(0)).collect();
    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let cancelled = AtomicBool::new(false);
    let scan = Mutex::new((0usize, &mut *rules));
    let feed = |scan: &Mutex<(usize, &mut Sequencer)>| {
        let mut guard = scan
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        let (done, rules) = &mut *guard;
        while *done < limit {
            let r = results[*done].load(Ordering::Acquire);
            if r == 0 {
                break;
            }
            *done += 1;
            if rules.push(r == 2) {
                stop.store(true, Ordering::Relaxed);
                break;
            }
        }
        *done
    };
    std::thread::scope(|scope| {
        for t in 0..threads {
            let (results, next, stop, cancelled, scan, feed) =
                (&results, &next, &stop, &cancelled, &scan, &feed);
            scope.spawn(move || {
                let mut work = scratch();
                let mut reported = 0;
                loop {
                    if stop.load(Ordering::Relaxed) || cancelled.load(Ordering::Relaxed) {
                        return;
                    }
                    let start = next.fetch_add(CHUNK, Ordering::Relaxed);
                    if start >= limit {
                        return;
                    }
                    for (k, slot) in results
                        .iter()
                        .enumerate()
                        .take((start + CHUNK).min(limit))
                        .skip(start)
                    {
                        slot.store(1 + u8::from(hit(k, &mut work)), Ordering::Release);
                    }
                    let done = feed(scan);
                    if t == 0 && done >= reported + 256 {
                        reported = done;
                        if !keep_going(done as f64 / limit as f64) {
                            cancelled.store(true, Ordering::Relaxed);
                        }
                    }
                }
            });
        }
    });
    if cancelled.load(Ordering::Relaxed) {
        return None;
    }
    feed(&scan);
    Some(())
}

/// The permutation test on unit data: centres the lots (as the analysis does) and runs
/// [`permutation_test`] with every relabelling drawn.
pub fn permutation_test_data(
    x: &DMatrix<f64>,
    y: &DMatrix<f64>,
    permutations: usize,
    seed: u64,
) -> Option<PermutationResult> {
    permutation_test_data_sequential(x, y, permutations, seed, None, 0.05)
}

/// As [`permutation_test_data`], with sequential stopping as given (decisions at `alpha`).
pub fn permutation_test_data_sequential(
    x: &DMatrix<f64>,
    y: &DMatrix<f64>,
    permutations: usize,
    seed: u64,
    sequential: Option<&Sequential>,
    alpha: f64,
) -> Option<PermutationResult> {
    if x.nrows() == 0 || y.nrows() == 0 {
        return None;
    }
    let origin: DVector<f64> = x.row(0).transpose();
    let (m1, c1) = LotMoments::from_data_centred(x, &origin);
    let (m2, c2) = LotMoments::from_data_centred(y, &origin);
    let d = &m1.offset - &m2.offset;
    permutation_test(
        [&c1, &c2],
        &d,
        permutations,
        seed,
        sequential,
        alpha,
        &|_| true,
    )
}

/// The slow reference: the same relabellings as [`permutation_test`], each refitted with the
/// full T² (for tests and the benchmark that shows the speed-up), every one drawn.
pub fn permutation_test_refit(
    x: &DMatrix<f64>,
    y: &DMatrix<f64>,
    permutations: usize,
    seed: u64,
) -> Option<PermutationResult> {
    let hits = permutation_hits_refit(x, y, permutations, seed)?;
    let mut rules = Sequencer::new(permutations, None, 0.05);
    for h in hits {
        rules.push(h);
    }
    Some(rules.result(seed))
}

/// Whether each of the relabellings `0..permutations` reached the observed T², each refitted
/// with the full T²: the sequence a sequential run reads in order (for tests).
pub fn permutation_hits_refit(
    x: &DMatrix<f64>,
    y: &DMatrix<f64>,
    permutations: usize,
    seed: u64,
) -> Option<Vec<bool>> {
    let (n1, p) = x.shape();
    let n2 = y.nrows();
    let n = n1 + n2;
    let names: Vec<String> = (0..p).map(|k| k.to_string()).collect();
    let all = DMatrix::from_fn(n, p, |i, k| if i < n1 { x[(i, k)] } else { y[(i - n1, k)] });
    let origin: DVector<f64> = all.row(0).transpose();
    let t2_of = |first: &[usize], second: &[usize]| -> Option<f64> {
        let a = all.select_rows(first);
        let b = all.select_rows(second);
        let (ma, _) = LotMoments::from_data_centred(&a, &origin);
        let (mb, _) = LotMoments::from_data_centred(&b, &origin);
        let pooled = Pooled::new(&ma, &mb, &names).ok()?;
        Some(two_sample(&ma, &mb, &pooled, 0.05).t2)
    };
    let first: Vec<usize> = (0..n1).collect();
    let second: Vec<usize> = (n1..n).collect();
    let observed = t2_of(&first, &second)?;
    let (m, first_small) = if n1 <= n2 { (n1, true) } else { (n2, false) };
    let mut idx: Vec<usize> = (0..n).collect();
    let mut swaps = Vec::new();
    let mut hits = Vec::with_capacity(permutations);
    for k in 0..permutations {
        let mut rng = SplitMix64::for_permutation(seed, k);
        draw(&mut idx, m, &mut rng, &mut swaps);
        let mut chosen = vec![false; n];
        for &r in &idx[..m] {
            chosen[r] = true;
        }
        let small: Vec<usize> = (0..n).filter(|&r| chosen[r]).collect();
        let large: Vec<usize> = (0..n).filter(|&r| !chosen[r]).collect();
        undo(&mut idx, &swaps);
        let t2 = if first_small {
            t2_of(&small, &large)?
        } else {
            t2_of(&large, &small)?
        };
        hits.push(t2 >= observed * (1.0 - 1e-9));
    }
    Some(hits)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn group_sums_give_the_same_p_value_as_refitting() {
        // Property: T² is monotone in ‖s‖², so the fast test and the refit agree exactly.
        let mut rng = SplitMix64(5);
        let mut u = || (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        let x = DMatrix::from_fn(9, 3, |_, _| u());
        let y = DMatrix::from_fn(13, 3, |i, k| u() + 0.1 * (i % 2) as f64 + 0.05 * k as f64);
        let fast = permutation_test_data(&x, &y, 499, 42).unwrap();
        let slow = permutation_test_refit(&x, &y, 499, 42).unwrap();
        assert_eq!(fast.at_least_observed, slow.at_least_observed);
        // Reproducible.
        assert_eq!(permutation_test_data(&x, &y, 499, 42).unwrap(), fast);
    }

    #[test]
    fn the_boundaries_spend_at_most_the_sequence_and_never_cross() {
        // Properties of Gandy's definitions: the probability spent at each boundary under
        // p = alpha never exceeds ε_n; L_n < U_n; both are non-decreasing.
        let (alpha, risk) = (0.05, 1e-3);
        let mut b = Boundaries::new(alpha, risk);
        let mut last = (i64::MIN, i64::MIN);
        for n in 1..=20_000 {
            let (l, u) = b.step();
            let e = b.spending(n);
            let [su, sl] = b.spent();
            assert!(su <= e * (1.0 + 1e-12) && sl <= e * (1.0 + 1e-12), "n {n}");
            assert!(l < u, "n {n}: L {l} U {u}");
            assert!(l >= last.0 && u >= last.1, "n {n}");
            last = (l, u);
        }
    }

    #[test]
    fn the_first_boundary_stops_follow_from_the_definitions() {
        // With no hit at all the only path is S_n = 0, of probability (1 − α)^n under p = α,
        // and nothing is spent at the lower boundary before it first admits 0: L_n ≥ 0 first at
        // the smallest n with (1 − α)^n ≤ ε_n. Likewise the all-hit path (probability α^n)
        // gives the first n with U_n ≤ n.
        for (alpha, risk) in [(0.05f64, 1e-3f64), (0.01, 1e-3), (0.1, 1e-2)] {
            let spend = |n: usize| risk * n as f64 / (n as f64 + SPENDING_K);
            let first_lower = (1..).find(|&n| (1.0 - alpha).powi(n as i32) <= spend(n));
            let first_upper = (1..).find(|&n| alpha.powi(n as i32) <= spend(n));
            let mut b = Boundaries::new(alpha, risk);
            let (mut got_lower, mut got_upper) = (None, None);
            for n in 1..=5_000usize {
                let (l, u) = b.step();
                if l >= 0 && got_lower.is_none() {
                    got_lower = Some(n);
                }
                if u <= n as i64 && got_upper.is_none() {
                    got_upper = Some(n);
                }
            }
            assert_eq!(got_lower, first_lower, "alpha {alpha}");
            assert_eq!(got_upper, first_upper, "alpha {alpha}");
        }
    }

    #[test]
    fn the_interval_at_a_boundary_lies_on_the_decided_side_of_alpha() {
        // The reported interval (Clopper–Pearson, ε in each tail) at a lower-boundary stop
        // lies below alpha, at an upper-boundary stop above it, for every n.
        for (alpha, risk) in [(0.05, 1e-3), (0.01, 1e-3)] {
            let mut b = Boundaries::new(alpha, risk);
            for n in 1..=20_000usize {
                let (l, u) = b.step();
                if l >= 0 {
                    let iv = clopper_pearson(l as usize, n, risk);
                    assert!(iv[1] < alpha, "n {n}: L {l}, interval {iv:?}");
                }
                if u <= n as i64 {
                    let iv = clopper_pearson(u as usize, n, risk);
                    assert!(iv[0] > alpha, "n {n}: U {u}, interval {iv:?}");
                }
            }
        }
    }

    #[test]
    fn clopper_pearson_has_its_closed_forms_at_the_ends() {
        // With no hit the upper end solves (1 − p)^l = tail; with all hits the lower end
        // solves p^l = tail.
        let iv = clopper_pearson(0, 175, 1e-3);
        assert_eq!(iv[0], 0.0);
        assert!((iv[1] - (1.0 - 1e-3f64.powf(1.0 / 175.0))).abs() < 1e-10);
        let iv = clopper_pearson(40, 40, 1e-3);
        assert_eq!(iv[1], 1.0);
        assert!((iv[0] - 1e-3f64.powf(1.0 / 40.0)).abs() < 1e-10);
    }

    #[test]
    fn besag_clifford_stops_at_the_h_th_hit_or_at_b_minus_one_draws() {
        let rule = Sequential { hits: 3, risk: 0.0 };
        // Hits at draws 4, 9 and 17 (1-based): p = 3/17 (Besag & Clifford's h/l).
        let mut s = Sequencer::new(99, Some(&rule), 0.05);
        let mut stopped_at = 0;
        for l in 1..=99 {
            if s.push([4, 9, 17].contains(&l)) {
                stopped_at = l;
                break;
            }
        }
        let r = s.result(1);
        assert_eq!((stopped_at, r.drawn, r.at_least_observed), (17, 17, 3));
        assert_eq!(r.stopped_by, StoppedBy::Hits);
        assert_eq!(r.p_value, 3.0 / 17.0);
        // Two hits in B − 1 = 98 draws: p = (g + 1)/B = 3/99.
        let mut s = Sequencer::new(99, Some(&rule), 0.05);
        let mut l = 0;
        while !s.push(l == 10 || l == 50) {
            l += 1;
        }
        let r = s.result(1);
        assert_eq!((r.drawn, r.at_least_observed), (98, 2));
        assert_eq!(r.stopped_by, StoppedBy::Limit);
        assert_eq!(r.p_value, 3.0 / 99.0);
        // Off: all B drawn, p = (1 + g)/(1 + B).
        let mut s = Sequencer::new(99, None, 0.05);
        let mut l = 0;
        while !s.push(l % 10 == 0) {
            l += 1;
        }
        let r = s.result(1);
        assert_eq!(
            (r.drawn, r.at_least_observed, r.stopped_by),
            (99, 10, StoppedBy::All)
        );
        assert_eq!(r.p_value, 11.0 / 100.0);
    }

    #[test]
    fn the_draws_seen_do_not_depend_on_the_thread_count() {
        // A hit sequence that is a pure function of the draw number, fed through the threads
        // in chunks: the rules must see it in order whatever the number of threads.
        let hit = |k: usize, _: &mut ()| {
            SplitMix64::for_permutation(3, k)
                .next_u64()
                .is_multiple_of(7)
        };
        let rule = Sequential {
            hits: 40,
            risk: 1e-3,
        };
        let run = |threads: usize| {
            let mut s = Sequencer::new(999, Some(&rule), 0.05);
            drive(&mut s, threads, &|| (), &hit, &|_| true).unwrap();
            s.result(3)
        };
        let mut serial = Sequencer::new(999, Some(&rule), 0.05);
        let mut unit = ();
        let mut k = 0;
        while !serial.push(hit(k, &mut unit)) {
            k += 1;
        }
        let want = serial.result(3);
        for threads in [1, 2, 3, 8] {
            assert_eq!(run(threads), want, "{threads} threads");
        }
    }
}
