//! Power and sample size of the two-sample T² through the noncentral F distribution.
//!
//! # Formula
//! Under a true mean shift δ with common covariance Σ, `F ~ F'(p, N − p − 1, λ)` with
//! `λ = n1 n2/N · δᵀ Σ⁻¹ δ`. The noncentral F tail is a Poisson(λ/2)-weighted sum of
//! incomplete beta tails (Patnaik 1949; the series of Lenth 1987, Applied Statistics AS 226),
//! `P(F' > f) = Σⱼ e^{−λ/2} (λ/2)ʲ/j! · P(Beta(p/2 + j, ν/2) > x)`, `x = p f/(p f + ν)`,
//! summed outward from the Poisson mode until the remaining weight is negligible.

use statrs::function::gamma::ln_gamma;

use super::dist;

/// Upper tail `P(F' > f)` of the noncentral F distribution.
pub fn ncf_sf(f: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    if !crate::stats::positive(f) {
        return 1.0;
    }
    if lambda <= 0.0 {
        return dist::f_sf(f, d1, d2);
    }
    let den = d1 * f + d2;
    let (x, y) = (d1 * f / den, d2 / den);
    let h = lambda / 2.0;
    let term = |j: f64| dist::inc_beta(d1 / 2.0 + j, d2 / 2.0, x, y).1;
    let j0 = h.floor();
    let w0 = (-h + j0 * h.ln() - ln_gamma(j0 + 1.0)).exp();
    let mut sum = w0 * term(j0);
    let mut weight_seen = w0;
    // Forward from the mode.
    let (mut j, mut w) = (j0, w0);
    loop {
        w *= h / (j + 1.0);
        j += 1.0;
        sum += w * term(j);
        weight_seen += w;
        if w < 1e-18 * weight_seen.max(1e-300) && j > j0 + 5.0 || j > j0 + 1e6 {
            break;
        }
    }
    // Backward from the mode.
    let (mut j, mut w) = (j0, w0);
    while j > 0.0 {
        w *= j / h;
        j -= 1.0;
        let t = w * term(j);
        sum += t;
        if w < 1e-18 * weight_seen || t < 1e-18 * sum {
            break;
        }
    }
    sum.min(1.0)
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
    let ok = |n: usize| power(p, n, n, delta2, alpha) >= target;
    if ok(smallest) {
        return Some(smallest);
    }
    let mut hi = smallest.max(2) * 2;
    while !ok(hi) {
        hi *= 2;
        if hi > 100_000_000 {
            return None;
        }
    }
    let mut lo = hi / 2;
    while hi - lo > 1 {
        let mid = (lo + hi) / 2;
        if ok(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
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
