//! Normality checks for lots too big for Shapiro–Wilk (more than 5,000 units), with the size
//! of the departure beside every p-value: at 10⁵ units every test rejects departures too small
//! to matter, so skewness and excess kurtosis are reported as well.
//!
//! # Anderson–Darling
//! With `z₍ᵢ₎` the sorted units standardized by the mean and the SD (divisor `n − 1`),
//! `A² = −n − (1/n) Σᵢ (2i − 1) [ln Φ(z₍ᵢ₎) + ln(1 − Φ(z₍ₙ₊₁₋ᵢ₎))]`, modified for estimated
//! mean and variance as `A* = A² (1 + 0.75/n + 2.25/n²)`, with the p-value formulas of
//! D'Agostino & Stephens (1986), *Goodness-of-Fit Techniques*, Table 4.9 (case 3):
//! `A* ≥ 0.6: exp(1.2937 − 5.709 A* + 0.0186 A*²)`; `0.34 ≤ A* < 0.6: exp(0.9177 − 4.279 A* −
//! 1.38 A*²)`; `0.2 ≤ A* < 0.34: 1 − exp(−8.318 + 42.796 A* − 59.938 A*²)`; below 0.2:
//! `1 − exp(−13.436 + 101.14 A* − 223.73 A*²)` (coefficients from memory, as the tests say);
//! beyond `A* = 13` the p-value is below 1e-30 and reported as 0.
//! `ln Φ` is taken from the upper tail function, so it keeps its digits far into either tail.
//!
//! # D'Agostino's K²
//! `K² = Z(√b1)² + Z(b2)²` on 2 df: the skewness `√b1 = m3/m2^{3/2}` transformed to a normal
//! deviate by D'Agostino (1970, Biometrika 57:679) and the kurtosis `b2 = m4/m2²` by Anscombe &
//! Glynn (1983, Biometrika 70:227); moments with divisor n, from centred values.

use serde::{Deserialize, Serialize};

use super::dist;

/// Large-lot normality of one characteristic in one lot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LargeLotNormality {
    /// Units.
    pub n: usize,
    /// Sample skewness `√b1` (divisor n): the size of the asymmetry.
    pub skewness: f64,
    /// Excess kurtosis `b2 − 3`: the size of the tail departure.
    pub excess_kurtosis: f64,
    /// Anderson–Darling `A²`.
    pub anderson_darling: f64,
    /// Its modification for estimated parameters, `A* = A²(1 + 0.75/n + 2.25/n²)`.
    pub anderson_darling_modified: f64,
    /// p-value of `A*` (D'Agostino & Stephens, Table 4.9).
    pub anderson_darling_p: f64,
    /// Normal deviate of the skewness (D'Agostino 1970).
    pub z_skewness: f64,
    /// Normal deviate of the kurtosis (Anscombe & Glynn 1983).
    pub z_kurtosis: f64,
    /// `K² = z_skewness² + z_kurtosis²`.
    pub k2: f64,
    /// Its chi-square (2 df) p-value, `exp(−K²/2)`.
    pub k2_p: f64,
}

/// Largest `A*` the p-value formula is used for: beyond it the p-value is below 1e-30 and is
/// reported as 0 (the quadratic in the exponent turns up again far beyond the table's range).
pub const AD_FORMULA_MAX: f64 = 13.0;

/// p-value of the modified Anderson–Darling statistic (both parameters estimated).
pub fn anderson_darling_p(a: f64) -> f64 {
    if a > AD_FORMULA_MAX {
        return 0.0;
    }
    let p = if a >= 0.6 {
        (1.2937 - 5.709 * a + 0.0186 * a * a).exp()
    } else if a >= 0.34 {
        (0.9177 - 4.279 * a - 1.38 * a * a).exp()
    } else if a >= 0.2 {
        1.0 - (-8.318 + 42.796 * a - 59.938 * a * a).exp()
    } else {
        1.0 - (-13.436 + 101.14 * a - 223.73 * a * a).exp()
    };
    p.clamp(0.0, 1.0)
}

/// D'Agostino's (1970) normal deviate of the sample skewness `g1` from `n` units.
pub fn skewness_z(g1: f64, n: f64) -> f64 {
    let y = g1 * ((n + 1.0) * (n + 3.0) / (6.0 * (n - 2.0))).sqrt();
    let beta2 = 3.0 * (n * n + 27.0 * n - 70.0) * (n + 1.0) * (n + 3.0)
        / ((n - 2.0) * (n + 5.0) * (n + 7.0) * (n + 9.0));
    let w2 = -1.0 + (2.0 * (beta2 - 1.0)).sqrt();
    let delta = 1.0 / (0.5 * w2.ln()).sqrt();
    let alpha = (2.0 / (w2 - 1.0)).sqrt();
    let y = if y == 0.0 { 1.0 } else { y };
    delta * (y / alpha + ((y / alpha).powi(2) + 1.0).sqrt()).ln()
}

/// Anscombe & Glynn's (1983) normal deviate of the sample kurtosis `b2` (not excess) from
/// `n` units.
pub fn kurtosis_z(b2: f64, n: f64) -> f64 {
    let e = 3.0 * (n - 1.0) / (n + 1.0);
    let var = 24.0 * n * (n - 2.0) * (n - 3.0) / ((n + 1.0) * (n + 1.0) * (n + 3.0) * (n + 5.0));
    let x = (b2 - e) / var.sqrt();
    let sqrt_beta1 = 6.0 * (n * n - 5.0 * n + 2.0) / ((n + 7.0) * (n + 9.0))
        * (6.0 * (n + 3.0) * (n + 5.0) / (n * (n - 2.0) * (n - 3.0))).sqrt();
    let a = 6.0
        + 8.0 / sqrt_beta1 * (2.0 / sqrt_beta1 + (1.0 + 4.0 / (sqrt_beta1 * sqrt_beta1)).sqrt());
    let term1 = 1.0 - 2.0 / (9.0 * a);
    let denom = 1.0 + x * (2.0 / (a - 4.0)).sqrt();
    if denom == 0.0 {
        return f64::NAN;
    }
    let term2 = denom.signum() * ((1.0 - 2.0 / a) / denom.abs()).cbrt();
    (term1 - term2) / (2.0 / (9.0 * a)).sqrt()
}

/// The large-lot checks of one characteristic (`None` with fewer than 20 units, where the
/// kurtosis transformation is not defined, or without spread).
pub fn large_lot_normality(values: &[f64]) -> Option<LargeLotNormality> {
    let owned: Vec<f64>;
    let x: &[f64] = if values.iter().all(|v| v.is_finite()) {
        values
    } else {
        owned = values.iter().copied().filter(|v| v.is_finite()).collect();
        &owned
    };
    let n = x.len();
    if n < 20 {
        return None;
    }
    let nf = n as f64;
    let mean = x.iter().sum::<f64>() / nf;
    // Centred before any power is formed.
    let (mut m2, mut m3, mut m4) = (0.0, 0.0, 0.0);
    for &v in x {
        let d = v - mean;
        let d2 = d * d;
        m2 += d2;
        m3 += d2 * d;
        m4 += d2 * d2;
    }
    let (m2, m3, m4) = (m2 / nf, m3 / nf, m4 / nf);
    if !crate::stats::positive(m2) {
        return None;
    }
    let g1 = m3 / m2.powf(1.5);
    let b2 = m4 / (m2 * m2);
    let sd = (m2 * nf / (nf - 1.0)).sqrt();
    let z = super::sort::sorted(x.iter().map(|v| (v - mean) / sd));
    // Σᵢ (2i − 1)[ln Φ(z₍ᵢ₎) + ln Φ(−z₍ₙ₊₁₋ᵢ₎)], regrouped by unit (0-based j):
    // Σⱼ (2j + 1) ln Φ(z₍ⱼ₎) + (2n − 2j − 1) ln Φ(−z₍ⱼ₎). One tail function per unit: the smaller
    // side t = Φ(−|z|) keeps its digits, and the larger side is ln(1 − t) = ln_1p(−t).
    let mut sum = 0.0;
    for (j, &zj) in z.iter().enumerate() {
        let t = dist::norm_sf(zj.abs());
        // ln(1 − t): directly where 1 − t keeps the digits that matter (its absolute error,
        // about 1e-16, is what the sum feels), by ln_1p far in the tails.
        let large = if t > 1e-3 {
            (1.0 - t).ln()
        } else {
            (-t).ln_1p()
        };
        let small = t.ln();
        let (below, above) = if zj < 0.0 {
            (small, large)
        } else {
            (large, small)
        };
        sum += (2 * j + 1) as f64 * below + (2 * (n - j) - 1) as f64 * above;
    }
    let a2 = -nf - sum / nf;
    let a_star = a2 * (1.0 + 0.75 / nf + 2.25 / (nf * nf));
    let zs = skewness_z(g1, nf);
    let zk = kurtosis_z(b2, nf);
    let k2 = zs * zs + zk * zk;
    Some(LargeLotNormality {
        n,
        skewness: g1,
        excess_kurtosis: b2 - 3.0,
        anderson_darling: a2,
        anderson_darling_modified: a_star,
        anderson_darling_p: anderson_darling_p(a_star),
        z_skewness: zs,
        z_kurtosis: zk,
        k2,
        k2_p: (-0.5 * k2).exp(),
    })
}
