//! Fisher's linear discriminant scores and Lachenbruch's leave-one-out (holdout) error,
//! with each held-out unit handled by a rank-one (Sherman–Morrison) update instead of a refit
//! (Fisher 1936; Lachenbruch & Mickey 1968; Johnson & Wichern, 6th ed., §11.4).
//!
//! # Formula
//! Allocate `x` to the first lot when `aᵀ(x − (x̄1 + x̄2)/2) ≥ 0`, `a = Sp⁻¹ d`.
//! Holding out unit `j` of lot `g` (`u = x_j − x̄g`, `c = ng/(ng − 1)`):
//! `W₋ⱼ = W − c u uᵀ`, `W₋ⱼ⁻¹ = W⁻¹ + c W⁻¹u uᵀW⁻¹ / (1 − c uᵀW⁻¹u)` with `W = (N − 2) Sp`,
//! `d₋ⱼ = d ∓ u/(ng − 1)`, midpoint moved by `−u/(2(ng − 1))`.

use nalgebra::{DMatrix, DVector};

use super::hotelling::Pooled;

/// Scores `aᵀ(x − midpoint)` of every unit of a lot, from its centred data.
///
/// `shift` is the lot's mean minus the midpoint of the two means (`±d/2`).
pub fn scores(centred: &DMatrix<f64>, a: &DVector<f64>, shift: &DVector<f64>) -> Vec<f64> {
    let base = a.dot(shift);
    let s = centred * a;
    s.iter().map(|v| v + base).collect()
}

/// Leave-one-out misclassification counts `[lot 1 units put in lot 2, lot 2 units put in lot 1]`.
///
/// Returns `None` when a lot has fewer than two units (nothing is left to hold out against).
/// `keep_going` is polled every few thousand units; when it returns false the count stops
/// and `None` is returned.
pub fn leave_one_out(
    centred: [&DMatrix<f64>; 2],
    d: &DVector<f64>,
    pooled: &Pooled,
    mut keep_going: impl FnMut(f64) -> bool,
) -> Option<[usize; 2]> {
    let n = [centred[0].nrows(), centred[1].nrows()];
    if n[0] < 2 || n[1] < 2 {
        return None;
    }
    let total = (n[0] + n[1]) as f64;
    let w_scale = total - 2.0;
    // W⁻¹ v = Sp⁻¹ v / (N − 2).
    let w_solve = |v: &DVector<f64>| pooled.solve(v) / w_scale;
    let g = w_solve(d);
    let mut wrong = [0usize; 2];
    let mut done = 0usize;
    // The quadratic forms of both lots, one lot on each core.
    let quads = {
        let (q0, q1) = rayon::join(
            || pooled.quadratic_forms(centred[0]),
            || pooled.quadratic_forms(centred[1]),
        );
        [q0, q1]
    };
    for lot in 0..2 {
        let x = centred[lot];
        let ng = n[lot] as f64;
        let c = ng / (ng - 1.0);
        // Lot 1: d₋ⱼ = d − u/(n1 − 1); lot 2: d₋ⱼ = d + u/(n2 − 1).
        let s = if lot == 0 {
            -1.0 / (ng - 1.0)
        } else {
            1.0 / (ng - 1.0)
        };
        let half_d = if lot == 0 { 0.5 } else { -0.5 };
        // Per unit u (centred on its lot's mean), with h = W⁻¹ u and g = W⁻¹ d: only the
        // quadratic form h·u = uᵀ W⁻¹ u (one blocked triangular solve for the whole lot) and
        // g·u = h·d (a matrix-vector product) are needed. With w = a u + half_d d and
        // gj = g + s h: gj·w = a (g·u + s h·u) + half_d (g·d + s h·d); gj·u = g·u + s h·u;
        // h·w = a h·u + half_d h·d.
        let a = 1.0 + 0.5 / (ng - 1.0);
        let gd = g.dot(d);
        let quad = &quads[lot];
        let along = x * &g;
        if !keep_going(done as f64 / total) {
            return None;
        }
        for (q, &gu) in quad.iter().zip(along.iter()) {
            let uh = q / w_scale;
            let hd = gu;
            let denom = 1.0 - c * uh;
            let gj_w = a * (gu + s * uh) + half_d * (gd + s * hd);
            let gj_u = gu + s * uh;
            let h_w = a * uh + half_d * hd;
            let score = gj_w + c * gj_u * h_w / denom;
            let to_first = score >= 0.0;
            if (lot == 0) != to_first {
                wrong[lot] += 1;
            }
        }
        done += x.nrows();
    }
    Some(wrong)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::moments::LotMoments;

    fn lot(rows: &[[f64; 2]]) -> DMatrix<f64> {
        DMatrix::from_fn(rows.len(), 2, |i, j| rows[i][j])
    }

    /// Refits the discriminant without unit `j` of lot `g` and classifies it: the definition
    /// of the holdout procedure, done the slow way.
    fn brute_force(lots: [&DMatrix<f64>; 2]) -> [usize; 2] {
        let names = vec!["a".to_string(), "b".to_string()];
        let mut wrong = [0; 2];
        for g in 0..2 {
            for j in 0..lots[g].nrows() {
                let kept = lots[g].clone().remove_row(j);
                let pair = if g == 0 {
                    [&kept, lots[1]]
                } else {
                    [lots[0], &kept]
                };
                let origin = DVector::zeros(2);
                let (m1, _) = LotMoments::from_data_centred(pair[0], &origin);
                let (m2, _) = LotMoments::from_data_centred(pair[1], &origin);
                let pooled = Pooled::new(&m1, &m2, &names).unwrap();
                let a = pooled.solve(&(&m1.offset - &m2.offset));
                let mid = (&m1.offset + &m2.offset) * 0.5;
                let x: DVector<f64> = lots[g].row(j).transpose();
                let to_first = a.dot(&(x - mid)) >= 0.0;
                if (g == 0) != to_first {
                    wrong[g] += 1;
                }
            }
        }
        wrong
    }

    #[test]
    fn rank_one_holdout_equals_refitting() {
        // Property: the Sherman–Morrison update is algebraically the refit.
        let a = lot(&[
            [2.0, 3.1],
            [2.4, 2.2],
            [3.1, 3.9],
            [1.2, 2.8],
            [2.9, 2.0],
            [2.2, 3.3],
            [3.6, 3.0],
        ]);
        let b = lot(&[
            [3.0, 2.1],
            [3.5, 3.4],
            [2.1, 1.9],
            [4.0, 2.7],
            [3.2, 2.9],
            [2.7, 2.2],
        ]);
        let names = vec!["a".to_string(), "b".to_string()];
        let origin = DVector::zeros(2);
        let (m1, c1) = LotMoments::from_data_centred(&a, &origin);
        let (m2, c2) = LotMoments::from_data_centred(&b, &origin);
        let pooled = Pooled::new(&m1, &m2, &names).unwrap();
        let d = &m1.offset - &m2.offset;
        let fast = leave_one_out([&c1, &c2], &d, &pooled, |_| true).unwrap();
        assert_eq!(fast, brute_force([&a, &b]));
        assert!(
            fast[0] + fast[1] > 0,
            "the example should misclassify someone"
        );
    }
}
