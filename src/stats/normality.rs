//! Shapiro–Wilk test of normality for one characteristic in one lot.
//!
//! # Formula
//! Shapiro & Wilk (1965), Biometrika 52, with the coefficient and p-value approximations of
//! Royston (1995), Applied Statistics 44, algorithm AS R94: coefficients from normal scores
//! `mᵢ = Φ⁻¹((i − 3/8)/(n + 1/4))` corrected by polynomials in `1/√n` for the two extreme
//! ones; `W` is the squared correlation between the sorted data and the coefficients
//! (computed as `1 − W` to keep digits when W is near 1); the p-value is a normal tail of
//! `ln(1 − W)` (n ≥ 12) or of `−ln(γ − ln(1 − W))` (4 ≤ n ≤ 11), exact for n = 3.
//! Valid for 3 ≤ n ≤ 5000; beyond that the statistic is computed but the p-value is flagged.

use serde::{Deserialize, Serialize};
use statrs::function::erf;

use super::dist;

/// Result of the Shapiro–Wilk test.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ShapiroWilk {
    /// Units.
    pub n: usize,
    /// W statistic.
    pub w: f64,
    /// p-value.
    pub p_value: f64,
    /// False when n > 5000, outside the range where Royston's p-value is validated.
    pub p_value_validated: bool,
}

/// `c0 + c1 x + c2 x² + …`.
fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &k| acc * x + k)
}

/// Standard normal quantile.
pub fn qnorm(p: f64) -> f64 {
    -std::f64::consts::SQRT_2 * erf::erfc_inv(2.0 * p)
}

/// Most units the test is computed for: Royston's approximation is validated up to 5000.
pub const MAX_UNITS: usize = 5000;

/// Shapiro–Wilk W and p-value; `None` for fewer than 3 units, more than [`MAX_UNITS`], or no
/// spread.
pub fn shapiro_wilk(values: &[f64]) -> Option<ShapiroWilk> {
    if values.len() > MAX_UNITS {
        return None;
    }
    shapiro_wilk_any(values)
}

/// Shapiro–Wilk for any number of units (the p-value is flagged beyond [`MAX_UNITS`]).
pub fn shapiro_wilk_any(values: &[f64]) -> Option<ShapiroWilk> {
    const G: [f64; 2] = [-2.273, 0.459];
    const C1: [f64; 6] = [0.0, 0.221157, -0.147981, -2.07119, 4.434685, -2.706056];
    const C2: [f64; 6] = [0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633];
    const C3: [f64; 4] = [0.544, -0.39978, 0.025054, -6.714e-4];
    const C4: [f64; 4] = [1.3822, -0.77857, 0.062767, -0.0020322];
    const C5: [f64; 4] = [-1.5861, -0.31082, -0.083751, 0.0038915];
    const C6: [f64; 3] = [-0.4803, -0.082676, 0.0030302];

    let n = values.len();
    if n < 3 {
        return None;
    }
    let mut x = values.to_vec();
    x.sort_by(f64::total_cmp);
    let range = x[n - 1] - x[0];
    if !crate::stats::positive(range) {
        return None;
    }
    let an = n as f64;
    let nn2 = n / 2;
    // a[1..=nn2], 1-based like the published algorithm.
    let mut a = vec![0.0; nn2 + 1];
    if n == 3 {
        a[1] = 0.5_f64.sqrt();
    } else {
        let an25 = an + 0.25;
        let mut summ2 = 0.0;
        for (i, ai) in a.iter_mut().enumerate().skip(1) {
            *ai = qnorm((i as f64 - 0.375) / an25);
            summ2 += *ai * *ai;
        }
        summ2 *= 2.0;
        let ssumm2 = summ2.sqrt();
        let rsn = 1.0 / an.sqrt();
        let a1 = poly(&C1, rsn) - a[1] / ssumm2;
        let (i1, fac) = if n > 5 {
            let a2 = -a[2] / ssumm2 + poly(&C2, rsn);
            let fac = ((summ2 - 2.0 * a[1] * a[1] - 2.0 * a[2] * a[2])
                / (1.0 - 2.0 * a1 * a1 - 2.0 * a2 * a2))
                .sqrt();
            a[2] = a2;
            (3, fac)
        } else {
            (
                2,
                ((summ2 - 2.0 * a[1] * a[1]) / (1.0 - 2.0 * a1 * a1)).sqrt(),
            )
        };
        a[1] = a1;
        for ai in a.iter_mut().skip(i1) {
            *ai /= -fac;
        }
    }
    // Coefficient of the i-th smallest value (0-based): −a[i+1] in the lower half, +a[n−i]
    // in the upper half, 0 for the middle of an odd n.
    let coef = |i: usize| -> f64 {
        let j = n - 1 - i;
        match i.cmp(&j) {
            std::cmp::Ordering::Less => -a[i + 1],
            std::cmp::Ordering::Greater => a[j + 1],
            std::cmp::Ordering::Equal => 0.0,
        }
    };
    let xs: Vec<f64> = x.iter().map(|v| (v - x[0]) / range).collect();
    let sx = xs.iter().sum::<f64>() / an;
    let sa = (0..n).map(coef).sum::<f64>() / an;
    let (mut ssa, mut ssx, mut sax) = (0.0, 0.0, 0.0);
    for (i, xi) in xs.iter().enumerate() {
        let asa = coef(i) - sa;
        let xsx = xi - sx;
        ssa += asa * asa;
        ssx += xsx * xsx;
        sax += asa * xsx;
    }
    let ssassx = (ssa * ssx).sqrt();
    let w1 = (ssassx - sax) * (ssassx + sax) / (ssa * ssx);
    let w = 1.0 - w1;
    let p_value = if n == 3 {
        let pi6 = 6.0 / std::f64::consts::PI;
        let stqr = std::f64::consts::PI / 3.0;
        (pi6 * (w.sqrt().asin() - stqr)).max(0.0)
    } else {
        let y = w1.ln();
        let xx = an.ln();
        if n <= 11 {
            let gamma = poly(&G, an);
            if y >= gamma {
                1e-99
            } else {
                let y = -(gamma - y).ln();
                let m = poly(&C3, an);
                let s = poly(&C4, an).exp();
                dist::norm_sf((y - m) / s)
            }
        } else {
            let m = poly(&C5, xx);
            let s = poly(&C6, xx).exp();
            dist::norm_sf((y - m) / s)
        }
    };
    Some(ShapiroWilk {
        n,
        w,
        p_value,
        p_value_validated: n <= 5000,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn invariant_to_location_and_scale() {
        // Property: W depends only on the shape of the sample.
        let x = [
            2.1, 3.4, 1.9, 5.6, 4.4, 3.3, 2.8, 4.1, 3.9, 2.2, 6.3, 3.0, 2.7,
        ];
        let y: Vec<f64> = x.iter().map(|v| 1000.0 + 0.01 * v).collect();
        let a = shapiro_wilk(&x).unwrap();
        let b = shapiro_wilk(&y).unwrap();
        assert!((a.w - b.w).abs() < 1e-10);
        assert!((a.p_value - b.p_value).abs() < 1e-8);
    }

    #[test]
    fn three_points_exact() {
        // n = 3: equally spaced points give W = 1 and p = 1 (the exact distribution).
        let r = shapiro_wilk(&[1.0, 2.0, 3.0]).unwrap();
        assert!((r.w - 1.0).abs() < 1e-12);
        assert!((r.p_value - 1.0).abs() < 1e-9);
    }

    #[test]
    fn normal_quantile() {
        // Φ⁻¹(0.975) = √2·erfinv(0.95) = 1.959963984540054: mpmath at 50 digits, rounded to 16
        // (tests/fixtures/make_fixtures.py writes it as distributions.norm_ppf and
        // tests/suite/reference.rs checks it from there); printed normal tables give 1.960.
        assert!((qnorm(0.975) - 1.959_963_984_540_054).abs() < 1e-13);
    }
}
