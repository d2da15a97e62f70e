//! Two-sample Hotelling T², its F form, follow-up intervals and the discriminant direction
//! (Hotelling 1931; Johnson & Wichern, Applied Multivariate Statistical Analysis, 6th ed.,
//! §6.3 and §11.3).
//!
//! # Formula
//! `Sp = ((n1−1)S1 + (n2−1)S2)/(N−2)`, `T² = n1 n2/N · dᵀ Sp⁻¹ d`,
//! `F = (N−p−1)/((N−2)p) · T²` on `(p, N−p−1)` df, `d = x̄2 − x̄1`: lot 2 (the candidate) minus lot 1 (the reference).
//! Solves use the Cholesky factor of the pooled *correlation* matrix `R = D⁻¹ Sp D⁻¹`
//! (`D` the pooled standard deviations), so characteristics in very different units do not
//! spoil the conditioning; no inverse is formed.

use nalgebra::{Cholesky, DMatrix, DVector, Dyn, SymmetricEigen};

use super::EngineError;
use super::dist;
use super::moments::LotMoments;

/// Condition number of the pooled correlation matrix above which results carry a warning
/// (common practice: about log10(cond) of the 16 significant digits are lost).
pub const CONDITION_WARN: f64 = 1e6;
/// Condition number above which the pooled covariance counts as singular.
pub const CONDITION_SINGULAR: f64 = 1e13;
/// A pooled standard deviation below this fraction of the data's spread counts as zero.
pub const CONSTANT_RELATIVE: f64 = 1e-10;

/// The pooled covariance with its factorization and conditioning.
#[derive(Debug, Clone)]
pub struct Pooled {
    /// Pooled covariance `Sp`.
    pub covariance: DMatrix<f64>,
    /// Pooled standard deviations `sqrt(Sp_kk)`.
    pub sd: DVector<f64>,
    /// Cholesky factor of the pooled correlation matrix.
    chol: Cholesky<f64, Dyn>,
    /// Condition number (ratio of extreme eigenvalues) of the pooled correlation matrix.
    pub condition: f64,
    /// Characteristics that load on the weakest direction (for warnings), most involved first.
    pub weakest: Vec<usize>,
}

impl Pooled {
    /// Pools two lots' cross-products and checks that the result can be solved with.
    pub fn new(m1: &LotMoments, m2: &LotMoments, names: &[String]) -> Result<Self, EngineError> {
        let p = m1.dim();
        let n_total = m1.n + m2.n;
        if n_total < p + 2 {
            return Err(EngineError::TooFewUnits {
                n1: m1.n,
                n2: m2.n,
                p,
            });
        }
        let covariance = (&m1.ssp + &m2.ssp) / (n_total - 2) as f64;
        let overflow: Vec<String> = (0..p)
            .filter(|&k| {
                !(covariance[(k, k)].is_finite()
                    && m1.offset[k].is_finite()
                    && m2.offset[k].is_finite())
            })
            .map(|k| names[k].clone())
            .collect();
        if !overflow.is_empty() {
            return Err(EngineError::Overflow { names: overflow });
        }
        let underflow: Vec<String> = (0..p)
            .filter(|&k| {
                covariance[(k, k)] == 0.0 && m1.spread_scale[k].max(m2.spread_scale[k]) > 0.0
            })
            .filter(|&k| m1.spread_scale[k].max(m2.spread_scale[k]) < 1e-150)
            .map(|k| names[k].clone())
            .collect();
        if !underflow.is_empty() {
            return Err(EngineError::Underflow { names: underflow });
        }
        let sd = DVector::from_iterator(p, (0..p).map(|k| covariance[(k, k)].max(0.0).sqrt()));
        let constant: Vec<String> = (0..p)
            .filter(|&k| {
                let scale = m1.spread_scale[k].max(m2.spread_scale[k]);
                sd[k].partial_cmp(&(CONSTANT_RELATIVE * scale)) != Some(std::cmp::Ordering::Greater)
            })
            .map(|k| names[k].clone())
            .collect();
        if !constant.is_empty() {
            return Err(EngineError::Constant { names: constant });
        }
        let mut corr = covariance.clone();
        for i in 0..p {
            for j in 0..p {
                corr[(i, j)] /= sd[i] * sd[j];
            }
        }
        let eig = SymmetricEigen::new(corr.clone());
        let (mut imin, mut imax) = (0, 0);
        for k in 0..p {
            if eig.eigenvalues[k] < eig.eigenvalues[imin] {
                imin = k;
            }
            if eig.eigenvalues[k] > eig.eigenvalues[imax] {
                imax = k;
            }
        }
        let lmin = eig.eigenvalues[imin];
        let lmax = eig.eigenvalues[imax];
        let condition = if lmin > 0.0 {
            lmax / lmin
        } else {
            f64::INFINITY
        };
        let v = eig.eigenvectors.column(imin);
        let vmax = v.amax();
        let mut weakest: Vec<usize> = (0..p).filter(|&k| v[k].abs() >= 0.2 * vmax).collect();
        weakest.sort_by(|&a, &b| v[b].abs().total_cmp(&v[a].abs()));
        let chol = match Cholesky::new(corr) {
            Some(c) if condition <= CONDITION_SINGULAR => c,
            _ => {
                return Err(EngineError::Collinear {
                    names: weakest.iter().map(|&k| names[k].clone()).collect(),
                    condition,
                });
            }
        };
        Ok(Pooled {
            covariance,
            sd,
            chol,
            condition,
            weakest,
        })
    }

    /// `R⁻¹ v` for the pooled correlation matrix.
    pub fn solve_corr(&self, v: &DVector<f64>) -> DVector<f64> {
        self.chol.solve(v)
    }

    /// `Sp⁻¹ v`.
    pub fn solve(&self, v: &DVector<f64>) -> DVector<f64> {
        let z = v.component_div(&self.sd);
        self.chol.solve(&z).component_div(&self.sd)
    }

    /// `Sp⁻¹ V` for every column of `V` at once (one blocked triangular solve).
    pub fn solve_columns(&self, v: &DMatrix<f64>) -> DMatrix<f64> {
        let mut z = v.clone();
        for (mut row, &sd) in z.row_iter_mut().zip(self.sd.iter()) {
            row /= sd;
        }
        self.chol.solve_mut(&mut z);
        for (mut row, &sd) in z.row_iter_mut().zip(self.sd.iter()) {
            row /= sd;
        }
        z
    }

    /// `xᵢᵀ Sp⁻¹ xᵢ` for every unit (row) `xᵢ` of `x`: one blocked triangular solve for all
    /// the units ([`super::blocked::quadratic_forms`]).
    pub fn quadratic_forms(&self, x: &DMatrix<f64>) -> Vec<f64> {
        super::blocked::quadratic_forms(x, self.sd.as_slice(), &self.chol.l())
    }

    /// Diagonal of `R⁻¹` (needed for each characteristic's unique contribution), from the
    /// triangular factor: `(R⁻¹)_kk = ‖L⁻¹ e_k‖²`.
    pub fn corr_inverse_diagonal(&self) -> DVector<f64> {
        let p = self.sd.len();
        let l = self.chol.l();
        let mut out = DVector::zeros(p);
        for k in 0..p {
            let mut e = DVector::zeros(p);
            e[k] = 1.0;
            if let Some(w) = l.solve_lower_triangular(&e) {
                out[k] = w.norm_squared();
            }
        }
        out
    }
}

/// The test and everything derived from the pooled solve.
#[derive(Debug, Clone)]
pub struct TwoSampleT2 {
    /// `d = x̄2 − x̄1` (candidate − reference).
    pub difference: DVector<f64>,
    /// Hotelling's T².
    pub t2: f64,
    /// F statistic.
    pub f: f64,
    /// Numerator df, `p`.
    pub df1: f64,
    /// Denominator df, `N − p − 1`.
    pub df2: f64,
    /// `P(F > f)`.
    pub p_value: f64,
    /// Critical F at alpha.
    pub critical_f: f64,
    /// Critical T² at alpha (`c²`).
    pub critical_t2: f64,
    /// Mahalanobis `D² = dᵀ Sp⁻¹ d`.
    pub mahalanobis_d2: f64,
    /// Raw discriminant coefficients `a = Sp⁻¹ d`.
    pub coefficients: DVector<f64>,
    /// Standardized coefficients `a_k sqrt(Sp_kk)`.
    pub standardized: DVector<f64>,
    /// Pooled within-lot structure correlations `d_k / (sqrt(Sp_kk) D)`.
    pub structure: DVector<f64>,
    /// Drop in T² when characteristic k is left out: `n1 n2/N · b_k² / (R⁻¹)_kk`.
    pub t2_drop: DVector<f64>,
}

/// Runs the two-sample T² on pooled moments at level `alpha`.
///
/// # Formula
/// `T² = n1 n2/(n1 + n2) · dᵀ Sp⁻¹ d` with `d = x̄2 − x̄1` (candidate − reference) and the pooled covariance `Sp`;
/// `F = (N − p − 1)/((N − 2) p) · T²` on `(p, N − p − 1)` df (Johnson & Wichern, Applied
/// Multivariate Statistical Analysis, 6th ed., Result 6.2). `Sp⁻¹ d` comes from a Cholesky
/// solve of the pooled correlation matrix, never from an inverse.
///
/// # Examples
/// With one characteristic T² is the square of the pooled two-sample t statistic:
/// ```
/// use lotshift::stats::hotelling::{Pooled, two_sample};
/// use lotshift::stats::moments::LotMoments;
/// use nalgebra::{DMatrix, DVector};
/// let (a, b) = ([4.1, 5.0, 3.8, 4.6, 5.3], [5.2, 6.1, 5.8, 4.9, 6.4, 5.5]);
/// let origin = DVector::from_vec(vec![a[0]]);
/// let (m1, _) = LotMoments::from_data_centred(&DMatrix::from_column_slice(5, 1, &a), &origin);
/// let (m2, _) = LotMoments::from_data_centred(&DMatrix::from_column_slice(6, 1, &b), &origin);
/// let pooled = Pooled::new(&m1, &m2, &["x".to_string()]).unwrap();
/// let test = two_sample(&m1, &m2, &pooled, 0.05);
/// // The pooled t statistic written out by hand.
/// let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
/// let ss = |v: &[f64]| v.iter().map(|x| (x - mean(v)).powi(2)).sum::<f64>();
/// let sp2 = (ss(&a) + ss(&b)) / 9.0;
/// let t = (mean(&b) - mean(&a)) / (sp2 * (1.0 / 5.0 + 1.0 / 6.0)).sqrt();
/// assert!((test.t2 - t * t).abs() < 1e-12 * t * t);
/// assert!((test.f - t * t).abs() < 1e-12 * t * t); // p = 1: F = T²
/// ```
pub fn two_sample(m1: &LotMoments, m2: &LotMoments, pooled: &Pooled, alpha: f64) -> TwoSampleT2 {
    let p = m1.dim();
    let (n1, n2) = (m1.n as f64, m2.n as f64);
    let n = n1 + n2;
    let difference = &m2.offset - &m1.offset;
    let z = difference.component_div(&pooled.sd);
    let standardized = pooled.solve_corr(&z);
    let coefficients = standardized.component_div(&pooled.sd);
    let d2 = z.dot(&standardized).max(0.0);
    let scale = n1 * n2 / n;
    let t2 = scale * d2;
    let df1 = p as f64;
    let df2 = n - df1 - 1.0;
    let f = (df2 / ((n - 2.0) * df1)) * t2;
    let p_value = dist::f_sf(f, df1, df2);
    let critical_f = dist::f_isf(alpha, df1, df2);
    let critical_t2 = (n - 2.0) * df1 / df2 * critical_f;
    let d = d2.sqrt();
    let structure = if d > 0.0 { z / d } else { DVector::zeros(p) };
    let rinv_diag = pooled.corr_inverse_diagonal();
    let t2_drop = DVector::from_iterator(
        p,
        (0..p).map(|k| scale * standardized[k] * standardized[k] / rinv_diag[k]),
    );
    TwoSampleT2 {
        difference,
        t2,
        f,
        df1,
        df2,
        p_value,
        critical_f,
        critical_t2,
        mahalanobis_d2: d2,
        coefficients,
        standardized,
        structure,
        t2_drop,
    }
}

/// Follow-up intervals for one characteristic's mean difference.
#[derive(Debug, Clone, Copy)]
pub struct IntervalSet {
    /// Standard error `sqrt((1/n1 + 1/n2) Sp_kk)`.
    pub standard_error: f64,
    /// T²-based simultaneous interval.
    pub simultaneous: [f64; 2],
    /// Bonferroni interval (`t_{N−2}(alpha/(2p))`).
    pub bonferroni: [f64; 2],
    /// One-at-a-time interval (`t_{N−2}(alpha/2)`).
    pub one_at_a_time: [f64; 2],
}

/// Simultaneous, Bonferroni and one-at-a-time intervals for every characteristic.
pub fn intervals(
    m1: &LotMoments,
    m2: &LotMoments,
    pooled: &Pooled,
    test: &TwoSampleT2,
    alpha: f64,
) -> Vec<IntervalSet> {
    let p = m1.dim();
    let (n1, n2) = (m1.n as f64, m2.n as f64);
    let df = n1 + n2 - 2.0;
    let c = test.critical_t2.sqrt();
    let t_bonf = dist::t_isf2(alpha / p as f64, df);
    let t_one = dist::t_isf2(alpha, df);
    (0..p)
        .map(|k| {
            let se = ((1.0 / n1 + 1.0 / n2) * pooled.covariance[(k, k)]).sqrt();
            let d = test.difference[k];
            IntervalSet {
                standard_error: se,
                simultaneous: [d - c * se, d + c * se],
                bonferroni: [d - t_bonf * se, d + t_bonf * se],
                one_at_a_time: [d - t_one * se, d + t_one * se],
            }
        })
        .collect()
}

/// Univariate two-sample t tests for one characteristic.
#[derive(Debug, Clone, Copy)]
pub struct UnivariateTests {
    /// Pooled-variance t.
    pub pooled_t: f64,
    /// Its df, `N − 2`.
    pub pooled_df: f64,
    /// Two-sided p-value.
    pub pooled_p: f64,
    /// Welch's t.
    pub welch_t: f64,
    /// Welch–Satterthwaite df.
    pub welch_df: f64,
    /// Two-sided p-value.
    pub welch_p: f64,
}

/// Pooled and Welch t tests of characteristic `k`.
pub fn univariate(m1: &LotMoments, m2: &LotMoments, pooled: &Pooled, k: usize) -> UnivariateTests {
    let (n1, n2) = (m1.n as f64, m2.n as f64);
    let d = m2.offset[k] - m1.offset[k];
    let pooled_df = n1 + n2 - 2.0;
    let pooled_t = d / ((1.0 / n1 + 1.0 / n2) * pooled.covariance[(k, k)]).sqrt();
    let v1 = if m1.n > 1 {
        m1.ssp[(k, k)] / (n1 - 1.0) / n1
    } else {
        f64::NAN
    };
    let v2 = if m2.n > 1 {
        m2.ssp[(k, k)] / (n2 - 1.0) / n2
    } else {
        f64::NAN
    };
    let welch_t = d / (v1 + v2).sqrt();
    let welch_df = (v1 + v2).powi(2) / (v1 * v1 / (n1 - 1.0) + v2 * v2 / (n2 - 1.0));
    UnivariateTests {
        pooled_t,
        pooled_df,
        pooled_p: dist::t_sf2(pooled_t, pooled_df),
        welch_t,
        welch_df,
        welch_p: if welch_t.is_finite() && welch_df.is_finite() {
            dist::t_sf2(welch_t, welch_df)
        } else {
            f64::NAN
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::DMatrix;

    fn moments(rows: &[[f64; 2]], origin: &DVector<f64>) -> LotMoments {
        let x = DMatrix::from_fn(rows.len(), 2, |i, k| rows[i][k]);
        LotMoments::from_data_centred(&x, origin).0
    }

    fn lots() -> (LotMoments, LotMoments, Pooled) {
        let origin = DVector::from_vec(vec![10.0, 20.0]);
        let a = moments(
            &[
                [10.2, 20.1],
                [9.8, 19.7],
                [10.5, 20.6],
                [10.1, 20.0],
                [9.6, 19.9],
                [10.3, 20.4],
            ],
            &origin,
        );
        let b = moments(
            &[
                [10.6, 20.2],
                [10.9, 20.8],
                [10.4, 19.9],
                [11.0, 20.5],
                [10.7, 20.6],
            ],
            &origin,
        );
        let p = Pooled::new(&a, &b, &["x".into(), "y".into()]).unwrap();
        (a, b, p)
    }

    /// Swapping the lots changes the sign of the difference and nothing else
    /// (a property of the statistic).
    #[test]
    fn swapping_lots_keeps_t2() {
        let (a, b, p) = lots();
        let ab = two_sample(&a, &b, &p, 0.05);
        let pba = Pooled::new(&b, &a, &["x".into(), "y".into()]).unwrap();
        let ba = two_sample(&b, &a, &pba, 0.05);
        assert!((ab.t2 - ba.t2).abs() < 1e-12 * ab.t2);
        assert!((ab.difference[0] + ba.difference[0]).abs() < 1e-15);
    }

    /// Each simultaneous interval is wider than the Bonferroni one, which is wider than the
    /// one-at-a-time one (c² = critical T² exceeds t²(alpha/2p) exceeds t²(alpha/2) for p = 2).
    #[test]
    fn interval_widths_are_ordered() {
        let (a, b, p) = lots();
        let t = two_sample(&a, &b, &p, 0.05);
        for s in intervals(&a, &b, &p, &t, 0.05) {
            let w = |iv: [f64; 2]| iv[1] - iv[0];
            assert!(w(s.simultaneous) > w(s.bonferroni));
            assert!(w(s.bonferroni) > w(s.one_at_a_time));
        }
    }

    /// The unique contributions are T² minus T² refitted without the characteristic
    /// (the identity behind the rank-one formula).
    #[test]
    fn t2_drop_is_the_refit_difference() {
        let (a, b, p) = lots();
        let t = two_sample(&a, &b, &p, 0.05);
        let (n1, n2) = (a.n as f64, b.n as f64);
        for k in 0..2 {
            let other = 1 - k;
            let d = t.difference[other];
            let alone = n1 * n2 / (n1 + n2) * d * d / p.covariance[(other, other)];
            assert!((t.t2_drop[k] - (t.t2 - alone)).abs() < 1e-10 * t.t2, "{k}");
        }
    }
}
