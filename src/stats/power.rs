//! Power and sample size of the two-sample T² through the noncentral F distribution.
//!
//! # Formula
//! Under a true mean shift δ with common covariance Σ, `F ~ F'(p, N − p − 1, λ)` with
//! `λ = n1 n2/N · δᵀ Σ⁻¹ δ`. The noncentral F tail is the Poisson(λ/2)-weighted sum of
//! incomplete beta tails (Patnaik 1949; Lenth 1987, Applied Statistics AS 226), evaluated by
//! [`super::equivalence::ncf_upper_tail`], the one noncentral F of the crate (both tails with
//! full relative precision).

use super::dist;
use super::equivalence;

/// Upper tail `P(F' > f)` of the noncentral F distribution (1 for `f ≤ 0` or NaN); see
/// [`equivalence::ncf_upper_tail`].
pub fn ncf_sf(f: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    if !crate::stats::positive(f) {
        return 1.0;
    }
    equivalence::ncf_upper_tail(f, d1, d2, lambda.max(0.0))
}

/// Power of the level-`alpha` T² test with `n1`, `n2` units, `p` characteristics and a true
/// shift of Mahalanobis distance squared `delta2 = δᵀ Σ⁻¹ δ`.
pub fn power(p: usize, n1: usize, n2: usize, delta2: f64, alpha: f64) -> f64 {
    let n = (n1 + n2) as f64;
    let d1 = p as f64;
    let d2 = n - d1 - 1.0;
    if d2 < 1.0 {
        return f64::NAN;
    }
    let lambda = n1 as f64 * n2 as f64 / n * delta2;
    let crit = dist::f_isf(alpha, d1, d2);
    ncf_sf(crit, d1, d2, lambda)
}

/// Smallest equal number of units per lot for which the power reaches `target`.
/// `None` when no lot size up to 10⁸ does.
pub fn units_per_lot(p: usize, delta2: f64, alpha: f64, target: f64) -> Option<usize> {
    let smallest = p / 2 + 2; // keeps N − p − 1 ≥ 1
    super::equivalence::smallest_n(smallest.max(2), |n| power(p, n, n, delta2, alpha) >= target)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cohen_table_two_groups() {
        // Cohen (1988), Statistical Power Analysis, Table 2.4.1 (from memory): a two-sided
        // t test at alpha 0.05 needs n = 64 per group for d = 0.5 and power 0.80.
        assert_eq!(units_per_lot(1, 0.25, 0.05, 0.80), Some(64));
    }

    #[test]
    fn no_shift_has_power_alpha() {
        assert!((power(4, 20, 25, 0.0, 0.05) - 0.05).abs() < 1e-12);
    }
}
