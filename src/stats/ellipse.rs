//! Confidence and data ellipses for a pair of characteristics, as point lists to draw.
//!
//! # Formula
//! An ellipse `{ c + v : vᵀ A⁻¹ v ≤ r² }` is traced as `c + r L (cos θ, sin θ)` with
//! `A = L Lᵀ` (Cholesky). The scale `r²` says what the region is:
//! - a lot's mean, this pair alone: `r² = (n−1)·2/(n(n−2)) · F_α(2, n−2)`, `A = S_pair`;
//! - the mean difference: `A = (1/n1 + 1/n2) Sp_pair` with either the `p`-dimensional critical
//!   T² (the shadow of the T² region, consistent with the simultaneous intervals) or the
//!   2-dimensional one (a region for this pair alone);
//! - a data ellipse with normal-theory coverage `γ`: `r² = χ²₂(γ) = −2 ln(1 − γ)`, `A = S_pair`.

use nalgebra::{Matrix2, Vector2};

use super::dist;

/// Points of one closed ellipse.
pub type Outline = Vec<[f64; 2]>;

/// Traces `{ c + v : vᵀ A⁻¹ v ≤ r² }` with `segments` points (closed: first point repeated).
pub fn outline(center: [f64; 2], a: Matrix2<f64>, r2: f64, segments: usize) -> Option<Outline> {
    if !(r2.is_finite() && r2 >= 0.0) {
        return None;
    }
    let l = a.cholesky()?.l();
    let r = r2.sqrt();
    let c = Vector2::new(center[0], center[1]);
    Some(
        (0..=segments)
            .map(|i| {
                let t = std::f64::consts::TAU * i as f64 / segments as f64;
                let p = c + l * Vector2::new(t.cos(), t.sin()) * r;
                [p[0], p[1]]
            })
            .collect(),
    )
}

/// `r²` of a one-lot mean confidence ellipse for one pair at level `1 − alpha`.
pub fn mean_region_r2(n: usize, alpha: f64) -> f64 {
    if n < 3 {
        return f64::NAN;
    }
    let n = n as f64;
    (n - 1.0) * 2.0 / (n * (n - 2.0)) * dist::f_isf(alpha, 2.0, n - 2.0)
}

/// `r²` of the mean-difference ellipse: the critical T² for `q` characteristics, on the scale
/// where `A = (1/n1 + 1/n2) Sp`.
pub fn difference_r2(n1: usize, n2: usize, q: usize, alpha: f64) -> f64 {
    let n = (n1 + n2) as f64;
    let q = q as f64;
    if n - q - 1.0 < 1.0 {
        return f64::NAN;
    }
    (n - 2.0) * q / (n - q - 1.0) * dist::f_isf(alpha, q, n - q - 1.0)
}

/// `r²` of a normal-theory data ellipse covering `coverage` of the units.
pub fn data_r2(coverage: f64) -> f64 {
    -2.0 * (1.0 - coverage).ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn outline_points_lie_on_the_boundary() {
        // Property: every traced point satisfies vᵀ A⁻¹ v = r².
        let a = Matrix2::new(4.0, 1.2, 1.2, 0.9);
        let pts = outline([1.0, -2.0], a, 5.991, 72).unwrap();
        let inv = a.try_inverse().unwrap(); // test oracle only
        for p in pts {
            let v = Vector2::new(p[0] - 1.0, p[1] + 2.0);
            assert!(((v.transpose() * inv * v)[0] - 5.991).abs() < 1e-9);
        }
    }

    #[test]
    fn data_ellipse_scale_is_chi_square() {
        // Printed chi-square table: the upper 5% point with 2 df is 5.991 (common practice;
        // value from memory). Exactly: chi-square with 2 df is exponential with mean 2, so its
        // upper-q point is −2 ln q (a mathematical identity).
        assert!((data_r2(0.95) - 5.991).abs() < 5e-4);
        assert!((data_r2(0.95) + 2.0 * 0.05_f64.ln()).abs() < 1e-12);
        assert!((data_r2(0.99) + 2.0 * 0.01_f64.ln()).abs() < 1e-12);
        assert!((dist::chi2_isf(0.05, 2.0) - data_r2(0.95)).abs() < 1e-9);
    }
}
