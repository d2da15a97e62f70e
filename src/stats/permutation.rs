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

use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use super::hotelling::{Pooled, two_sample};
use super::moments::LotMoments;

/// Result of the permutation test (record key `permutation`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PermutationResult {
    /// Relabellings drawn.
    pub permutations: usize,
    /// Seed of the draws.
    pub seed: u64,
    /// Relabellings whose T² reached the observed one.
    pub at_least_observed: usize,
    /// `(1 + at_least_observed) / (1 + permutations)`.
    pub p_value: f64,
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

/// Permutation p-value for two lots of unit data. `keep_going` receives the fraction done and
/// returns false to cancel (then `None`).
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
    keep_going: &(dyn Fn(f64) -> bool + Sync),
) -> Option<PermutationResult> {
    let (n1, p) = centred[0].shape();
    let n2 = centred[1].nrows();
    let n = n1 + n2;
    if n1 == 0 || n2 == 0 || p == 0 || permutations == 0 || d.len() != p {
        return None;
    }
    // All units, row-major, centred on the grand mean: each lot's centred units moved by its
    // mean's distance from the grand mean (+n2/N·d for the first lot, −n1/N·d for the second).
    let mut rows = vec![0.0; n * p];
    let (w1, w2) = (n2 as f64 / n as f64, n1 as f64 / n as f64);
    for k in 0..p {
        let (s1, s2) = (w1 * d[k], -w2 * d[k]);
        for (i, v) in centred[0].column(k).iter().enumerate() {
            rows[i * p + k] = v + s1;
        }
        for (i, v) in centred[1].column(k).iter().enumerate() {
            rows[(n1 + i) * p + k] = v + s2;
        }
    }
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
    let threads = std::thread::available_parallelism()
        .map_or(1, |c| c.get())
        .clamp(1, 8);
    let done = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let exceed = AtomicUsize::new(0);
    std::thread::scope(|scope| {
        for t in 0..threads {
            let (rows, done, stop, exceed, stat) = (&rows, &done, &stop, &exceed, &stat);
            scope.spawn(move || {
                let mut idx: Vec<usize> = (0..n).collect();
                let mut swaps = Vec::with_capacity(m);
                let mut s = vec![0.0; p];
                let mut w = vec![0.0; p];
                let mut local = 0usize;
                let mut k = t;
                while k < permutations {
                    if stop.load(Ordering::Relaxed) {
                        return;
                    }
                    let mut rng = SplitMix64::for_permutation(seed, k);
                    draw(&mut idx, m, &mut rng, &mut swaps);
                    s.iter_mut().for_each(|v| *v = 0.0);
                    for &r in &idx[..m] {
                        for (acc, v) in s.iter_mut().zip(&rows[r * p..(r + 1) * p]) {
                            *acc += v;
                        }
                    }
                    undo(&mut idx, &swaps);
                    if stat(&s, &mut w) >= threshold {
                        local += 1;
                    }
                    let d = done.fetch_add(1, Ordering::Relaxed) + 1;
                    if t == 0
                        && d.is_multiple_of(256)
                        && !keep_going(d as f64 / permutations as f64)
                    {
                        stop.store(true, Ordering::Relaxed);
                    }
                    k += threads;
                }
                exceed.fetch_add(local, Ordering::Relaxed);
            });
        }
    });
    if stop.load(Ordering::Relaxed) {
        return None;
    }
    let at_least = exceed.load(Ordering::Relaxed);
    Some(PermutationResult {
        permutations,
        seed,
        at_least_observed: at_least,
        p_value: (1 + at_least) as f64 / (1 + permutations) as f64,
    })
}

/// The permutation test on unit data: centres the lots (as the analysis does) and runs
/// [`permutation_test`].
pub fn permutation_test_data(
    x: &DMatrix<f64>,
    y: &DMatrix<f64>,
    permutations: usize,
    seed: u64,
) -> Option<PermutationResult> {
    if x.nrows() == 0 || y.nrows() == 0 {
        return None;
    }
    let origin: DVector<f64> = x.row(0).transpose();
    let (m1, c1) = LotMoments::from_data_centred(x, &origin);
    let (m2, c2) = LotMoments::from_data_centred(y, &origin);
    let d = &m1.offset - &m2.offset;
    permutation_test([&c1, &c2], &d, permutations, seed, &|_| true)
}

/// The slow reference: the same relabellings as [`permutation_test`], each refitted with the
/// full T² (for tests and the benchmark that shows the speed-up).
pub fn permutation_test_refit(
    x: &DMatrix<f64>,
    y: &DMatrix<f64>,
    permutations: usize,
    seed: u64,
) -> Option<PermutationResult> {
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
    let mut at_least = 0;
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
        if t2 >= observed * (1.0 - 1e-9) {
            at_least += 1;
        }
    }
    Some(PermutationResult {
        permutations,
        seed,
        at_least_observed: at_least,
        p_value: (1 + at_least) as f64 / (1 + permutations) as f64,
    })
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
}
