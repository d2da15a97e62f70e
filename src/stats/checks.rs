//! Assumption checks of the two-sample T²: Box's M for equal covariance matrices, Mardia's
//! multivariate skewness and kurtosis, outliers by squared Mahalanobis distance, and the
//! approximate-df test for unequal covariance matrices.

use nalgebra::{Cholesky, DMatrix, DVector};
use serde::{Deserialize, Serialize};

use super::dist;
use super::moments::LotMoments;

/// `ln |A|` of a symmetric positive definite matrix, scaled to unit diagonal first for
/// stability (the scale factors are added back). `None` when not positive definite.
pub fn ln_det(a: &DMatrix<f64>) -> Option<f64> {
    let p = a.nrows();
    let d: Vec<f64> = (0..p).map(|k| a[(k, k)]).collect();
    if d.iter().any(|&v| !crate::stats::positive(v)) {
        return None;
    }
    let scaled = DMatrix::from_fn(p, p, |i, j| a[(i, j)] / (d[i] * d[j]).sqrt());
    let l = Cholesky::new(scaled)?.l();
    let mut s: f64 = d.iter().map(|v| v.ln()).sum();
    for k in 0..p {
        let v = l[(k, k)];
        if !crate::stats::positive(v) {
            return None;
        }
        s += 2.0 * v.ln();
    }
    Some(s)
}

/// Box's M test of equal covariance matrices (record key `box_m`).
///
/// # Formula
/// Box (1949), Biometrika 36, for two groups (Rencher, *Methods of Multivariate Analysis*,
/// 2nd ed., §7.3.2 gives the same forms):
/// `M = (N − 2) ln|Sp| − Σ (nᵢ − 1) ln|Sᵢ|`;
/// `c1 = (Σ 1/(nᵢ−1) − 1/(N−2)) (2p² + 3p − 1)/(6(p + 1))`, `(1 − c1) M ~ χ²(p(p+1)/2)`;
/// F approximation with `c2 = (p−1)(p+2)/6 · (Σ 1/(nᵢ−1)² − 1/(N−2)²)`, `a1 = p(p+1)/2`,
/// `a2 = (a1 + 2)/|c2 − c1²|`: when `c2 > c1²`, `F = M (1 − c1 − a1/a2)/a1` on `(a1, a2)`,
/// otherwise `F = a2 b2 M / (a1 (1 − b2 M))` with `b2 = (1 − c1 + 2/a2)/a2`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BoxM {
    /// Box's M.
    pub m: f64,
    /// `(1 − c1) M`.
    pub chi2: f64,
    /// `p(p + 1)/2`.
    pub df: f64,
    /// Chi-square p-value.
    pub p_value: f64,
    /// F approximation.
    pub f: f64,
    /// Its numerator df.
    pub f_df1: f64,
    /// Its denominator df.
    pub f_df2: f64,
    /// F-approximation p-value.
    pub f_p_value: f64,
    /// Which approximation to read: `"chi-square"` or `"F"`.
    pub preferred: String,
    /// Why that one.
    pub why: String,
}

impl BoxM {
    /// The p-value of the preferred approximation.
    pub fn preferred_p_value(&self) -> f64 {
        if self.preferred == "F" {
            self.f_p_value
        } else {
            self.p_value
        }
    }
}

/// Box's M for two lots; `None` when a lot's covariance is singular (too few units or a
/// characteristic constant within the lot).
pub fn box_m(m1: &LotMoments, m2: &LotMoments) -> Option<BoxM> {
    let p = m1.dim() as f64;
    let (v1, v2) = (m1.n as f64 - 1.0, m2.n as f64 - 1.0);
    let v = v1 + v2;
    if v1 < p || v2 < p {
        return None;
    }
    let sp = (&m1.ssp + &m2.ssp) / v;
    let l_sp = ln_det(&sp)?;
    let l1 = ln_det(&(&m1.ssp / v1))?;
    let l2 = ln_det(&(&m2.ssp / v2))?;
    let m = (v * l_sp - v1 * l1 - v2 * l2).max(0.0);
    let sum_inv = 1.0 / v1 + 1.0 / v2;
    let c1 = (sum_inv - 1.0 / v) * (2.0 * p * p + 3.0 * p - 1.0) / (6.0 * (p + 1.0));
    let df = p * (p + 1.0) / 2.0;
    let chi2 = (1.0 - c1) * m;
    let c2 = (p - 1.0) * (p + 2.0) / 6.0 * (1.0 / (v1 * v1) + 1.0 / (v2 * v2) - 1.0 / (v * v));
    let a1 = df;
    let a2 = (a1 + 2.0) / (c2 - c1 * c1).abs();
    let f = if c2 > c1 * c1 {
        let b1 = (1.0 - c1 - a1 / a2) / a1;
        b1 * m
    } else {
        let b2 = (1.0 - c1 + 2.0 / a2) / a2;
        a2 * b2 * m / (a1 * (1.0 - b2 * m))
    };
    let f_p_value = if f.is_finite() && f >= 0.0 {
        dist::f_sf(f, a1, a2)
    } else {
        f64::NAN
    };
    // Common practice (e.g. Rencher §7.3.2): the chi-square form is adequate when every lot
    // has more than 20 units and p is at most 5; otherwise read the F form.
    let small = m1.n.min(m2.n) <= 20 || m1.dim() > 5;
    let (preferred, why) = if small && f_p_value.is_finite() {
        (
            "F",
            "a lot has 20 units or fewer, or there are more than 5 characteristics: the F \
             approximation is the closer one there",
        )
    } else {
        (
            "chi-square",
            "every lot has more than 20 units and there are at most 5 characteristics: the \
             chi-square approximation is adequate",
        )
    };
    Some(BoxM {
        m,
        chi2,
        df,
        p_value: dist::chi2_sf(chi2, df),
        f,
        f_df1: a1,
        f_df2: a2,
        f_p_value,
        preferred: preferred.into(),
        why: why.into(),
    })
}

/// Mardia's multivariate skewness and kurtosis of one lot (record key `mardia`).
///
/// # Formula
/// Mardia (1970), Biometrika 57: with the divisor-n covariance `S̃ = L Lᵀ` and whitened units
/// `zᵢ = L⁻¹(xᵢ − x̄)`, `b1 = (1/n²) Σᵢ Σⱼ (zᵢᵀzⱼ)³ = Σ_abc M_abc²` where
/// `M_abc = (1/n) Σᵢ z_ia z_ib z_ic` (the third-moment tensor: O(n·p³), never the O(n²) pair
/// sum), and `b2 = (1/n) Σᵢ (zᵢᵀzᵢ)²`. `n b1/6 ~ χ²(p(p+1)(p+2)/6)`;
/// `(b2 − p(p+2)) / sqrt(8p(p+2)/n) ~ N(0, 1)` (two-sided p-value).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Mardia {
    /// Lot name.
    pub lot: String,
    /// `b1,p`.
    pub skewness: f64,
    /// `n b1/6`.
    pub skewness_stat: f64,
    /// `p(p+1)(p+2)/6`.
    pub skewness_df: f64,
    /// Chi-square p-value.
    pub skewness_p: f64,
    /// `b2,p`.
    pub kurtosis: f64,
    /// Standardized kurtosis.
    pub kurtosis_z: f64,
    /// Two-sided normal p-value.
    pub kurtosis_p: f64,
}

/// Whitens centred data in place by the divisor-n covariance `S̃ = L Lᵀ` (each row becomes
/// `L⁻¹ xᵢ`, computed on the correlation scale). False, leaving the data unusable, when the
/// covariance is singular.
pub fn whiten_in_place(c: &mut DMatrix<f64>) -> bool {
    whiten_keeping(c).is_some()
}

/// The factor a whitening used: a unit's centred values are `sd ⊙ (L zᵢ)`.
#[derive(Debug, Clone)]
pub struct Whitening {
    /// Cholesky factor of the correlation matrix.
    pub l: DMatrix<f64>,
    /// Standard deviations (divisor n).
    pub sd: Vec<f64>,
}

impl Whitening {
    /// The centred values of the unit whose whitened row is `z`.
    pub fn unwhiten(&self, z: &[f64]) -> DVector<f64> {
        let p = self.sd.len();
        DVector::from_fn(p, |a, _| {
            let y: f64 = (0..=a).map(|b| self.l[(a, b)] * z[b]).sum();
            y * self.sd[a]
        })
    }
}

/// As [`whiten_in_place`], keeping the factor so single units can be turned back into
/// centred values; `None` (data unusable) when the covariance is singular.
pub fn whiten_keeping(c: &mut DMatrix<f64>) -> Option<Whitening> {
    let ssp = super::blocked::cross_products(c);
    whiten_with(c, &ssp)
}

/// As [`whiten_keeping`], with the centred units' cross-products `cᵀc` already known (the
/// lot's moments hold them), so the units are not passed over once more to form them.
pub fn whiten_with(c: &mut DMatrix<f64>, ssp: &DMatrix<f64>) -> Option<Whitening> {
    let (n, p) = c.shape();
    if n == 0 {
        return None;
    }
    let cov = ssp / n as f64;
    let sd: Vec<f64> = (0..p).map(|k| cov[(k, k)].sqrt()).collect();
    if sd.iter().any(|&s| !super::positive(s)) {
        return None;
    }
    let corr = DMatrix::from_fn(p, p, |i, j| cov[(i, j)] / (sd[i] * sd[j]));
    let chol = Cholesky::new(corr)?;
    let l = chol.l();
    for (k, s) in sd.iter().enumerate() {
        c.column_mut(k).unscale_mut(*s);
    }
    // Forward substitution for every unit, a block of units at a time.
    super::blocked::forward_substitute(c, &l);
    Some(Whitening { l, sd })
}

/// Mardia's statistics from whitened units (`n × p`, one row per unit).
///
/// The third-moment tensor `T_abc = Σᵢ zᵢₐ zᵢ_b zᵢ_c` is symmetric, so only `c ≤ a ≤ b` is
/// needed. It is formed as matrix products over blocks of units, `T += Zᵀ W`, with `W` holding
/// each unit's pairwise products `zᵢₐ zᵢ_b` (one column per pair `a ≤ b`) and `Zᵀ` a view of the
/// whitened block (no copy). The pairs are taken eight first indices `a` at a time (the
/// height of the kernels' register tile), each group multiplied only by the columns `c` up to
/// its largest `a`: about half the products of one `p × p(p+1)/2` product, and far fewer
/// memory passes than a loop per triple. `b1 = Σ over all ordered (a, b, c) of (T_abc / n)²`:
/// a stored triple stands for 1, 3 or 6 ordered ones.
pub fn mardia(lot: &str, z: &DMatrix<f64>) -> Mardia {
    use super::blocked;
    let (n, p) = z.shape();
    const BLOCK: usize = 512;
    const GROUP: usize = 8;
    // The groups of first indices, and for each its pairs (a, b), a ≤ b.
    let groups: Vec<(usize, Vec<(usize, usize)>)> = (0..p)
        .step_by(GROUP)
        .map(|g0| {
            let g1 = (g0 + GROUP).min(p);
            let pairs = (g0..g1).flat_map(|a| (a..p).map(move |b| (a, b))).collect();
            (g1, pairs)
        })
        .collect();
    let mut tensors: Vec<DMatrix<f64>> = groups
        .iter()
        .map(|(rows, pairs)| DMatrix::zeros(*rows, pairs.len()))
        .collect();
    let widest = groups.iter().map(|(_, pr)| pr.len()).max().unwrap_or(0);
    let mut w_buf = vec![0.0; BLOCK.min(n.max(1)) * widest];
    let mut r2 = vec![0.0; BLOCK];
    let mut b2_sum = 0.0;
    let all = z.as_slice();
    let mut start = 0;
    while start < n {
        let m = BLOCK.min(n - start);
        let col = |a: usize| &all[a * n + start..a * n + start + m];
        for ((rows, pairs), tensor) in groups.iter().zip(tensors.iter_mut()) {
            let w = &mut w_buf[..m * pairs.len()];
            for (k, &(a, b)) in pairs.iter().enumerate() {
                for ((dst, &x), &y) in w[k * m..(k + 1) * m].iter_mut().zip(col(a)).zip(col(b)) {
                    *dst = x * y;
                }
            }
            // The first `rows` columns of the block, transposed: element (c, i) is
            // all[c·n + start + i].
            let zt = blocked::strided(&all[start..], *rows, m, n, 1);
            let wv = blocked::strided(w, m, pairs.len(), 1, m);
            blocked::add_product(tensor, &zt, &wv);
        }
        // Each unit's squared length.
        r2[..m].fill(0.0);
        for a in 0..p {
            for (acc, &v) in r2[..m].iter_mut().zip(col(a)) {
                *acc += v * v;
            }
        }
        b2_sum += r2[..m].iter().map(|v| v * v).sum::<f64>();
        start += m;
    }
    let nf = n as f64;
    let mut b1 = 0.0;
    for ((_, pairs), tensor) in groups.iter().zip(&tensors) {
        for (k, &(a, b)) in pairs.iter().enumerate() {
            for c in 0..=a {
                let t = tensor[(c, k)] / nf;
                // Ordered triples per stored one: c ≤ a ≤ b.
                let ordered = if c == a && a == b {
                    1.0
                } else if c == a || a == b {
                    3.0
                } else {
                    6.0
                };
                b1 += ordered * t * t;
            }
        }
    }
    let b2 = b2_sum / nf;
    mardia_from(lot, n, p, b1, b2)
}

/// Mardia's tests from `b1,p` and `b2,p` of a lot of `n` units and `p` characteristics (as
/// computed inside a database from the whitened units' moments).
pub fn mardia_from(lot: &str, n: usize, p: usize, b1: f64, b2: f64) -> Mardia {
    let nf = n as f64;
    let pf = p as f64;
    let skewness_stat = nf * b1 / 6.0;
    let skewness_df = pf * (pf + 1.0) * (pf + 2.0) / 6.0;
    let kurtosis_z = (b2 - pf * (pf + 2.0)) / (8.0 * pf * (pf + 2.0) / nf).sqrt();
    Mardia {
        lot: lot.to_string(),
        skewness: b1,
        skewness_stat,
        skewness_df,
        skewness_p: dist::chi2_sf(skewness_stat, skewness_df),
        kurtosis: b2,
        kurtosis_z,
        kurtosis_p: 2.0 * dist::norm_sf(kurtosis_z.abs()),
    }
}

/// A unit far from its own lot's mean.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Outlier {
    /// Lot index (0 reference, 1 candidate).
    pub lot: usize,
    /// Index of the unit among the lot's compared units.
    pub unit: usize,
    /// Squared Mahalanobis distance from the lot mean (divisor n − 1 covariance).
    pub d2: f64,
    /// Upper-tail probability of `n d²/(n−1)²` under Beta(p/2, (n−p−1)/2).
    pub p_value: f64,
}

/// Outlier screening of one lot (Gnanadesikan & Kettenring 1972, Biometrics 28):
/// `n dᵢ²/(n−1)² ~ Beta(p/2, (n−p−1)/2)` for a normal lot. A unit is flagged when its tail
/// probability is below `alpha / n` (Bonferroni over the lot's units: common practice, so
/// that a big lot does not flag alpha of its units by chance). Returns the cutoff on d² and
/// the flagged units, largest distance first.
pub fn outliers(lot: usize, z: &DMatrix<f64>, alpha: f64) -> (f64, Vec<Outlier>) {
    let (n, p) = z.shape();
    let nf = n as f64;
    let cutoff = outlier_cutoff(n, p, alpha);
    if cutoff.is_nan() {
        return (f64::NAN, Vec::new());
    }
    // ‖zᵢ‖², accumulated a column at a time.
    let mut norms = vec![0.0; n];
    for col in z.column_iter() {
        for (acc, v) in norms.iter_mut().zip(col.iter()) {
            *acc += v * v;
        }
    }
    let mut out: Vec<Outlier> = norms
        .iter()
        .enumerate()
        .filter_map(|(i, &r2)| {
            // ‖z‖² is on the divisor-n scale; d² on the divisor-(n−1) scale is (n−1)/n of it.
            let d2 = r2 * (nf - 1.0) / nf;
            (d2 > cutoff).then(|| Outlier {
                lot,
                unit: i,
                d2,
                p_value: outlier_p(n, p, d2),
            })
        })
        .collect();
    out.sort_by(|x, y| y.d2.total_cmp(&x.d2));
    (cutoff, out)
}

/// The cutoff on d² (divisor n − 1) of [`outliers`]: NaN when the lot is too small.
pub fn outlier_cutoff(n: usize, p: usize, alpha: f64) -> f64 {
    let nf = n as f64;
    let (a, b) = (p as f64 / 2.0, (nf - p as f64 - 1.0) / 2.0);
    if b <= 0.0 {
        return f64::NAN;
    }
    dist::beta_isf(alpha / nf, a, b) * (nf - 1.0) * (nf - 1.0) / nf
}

/// The upper-tail probability of a unit at squared distance `d2` (divisor n − 1).
pub fn outlier_p(n: usize, p: usize, d2: f64) -> f64 {
    let nf = n as f64;
    let (a, b) = (p as f64 / 2.0, (nf - p as f64 - 1.0) / 2.0);
    let u = (d2 / ((nf - 1.0) * (nf - 1.0) / nf)).min(1.0);
    dist::inc_beta(a, b, u, 1.0 - u).1
}

/// The approximate-df test for unequal covariance matrices (record key `unequal_covariance`).
///
/// # Formula
/// Krishnamoorthy & Yu (2004), Statistics & Probability Letters 66 (modified Nel–Van der
/// Merwe): `Vᵢ = Sᵢ/nᵢ`, `S̃ = V1 + V2`, `T² = dᵀ S̃⁻¹ d`,
/// `ν = (p + p²) / Σᵢ (1/nᵢ) { tr[(Vᵢ S̃⁻¹)²] + [tr(Vᵢ S̃⁻¹)]² }`,
/// `T² ~ ν p/(ν − p + 1) · F(p, ν − p + 1)`. The weights are 1/nᵢ as in that paper (not
/// 1/(nᵢ − 1), an older variant with different df).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnequalCovariance {
    /// `dᵀ S̃⁻¹ d`.
    pub t2: f64,
    /// Approximate df ν.
    pub nu: f64,
    /// F statistic.
    pub f: f64,
    /// `p`.
    pub df1: f64,
    /// `ν − p + 1`.
    pub df2: f64,
    /// `P(F > f)`.
    pub p_value: f64,
}

/// The unequal-covariance test; `None` when a lot has fewer than two units or `S̃` is singular.
pub fn unequal_covariance(m1: &LotMoments, m2: &LotMoments) -> Option<UnequalCovariance> {
    if m1.n < 2 || m2.n < 2 {
        return None;
    }
    let p = m1.dim();
    let (n1, n2) = (m1.n as f64, m2.n as f64);
    let v1 = m1.covariance() / n1;
    let v2 = m2.covariance() / n2;
    let s = &v1 + &v2;
    let sd: Vec<f64> = (0..p).map(|k| s[(k, k)].sqrt()).collect();
    if sd.iter().any(|&v| !crate::stats::positive(v)) {
        return None;
    }
    let scale = |m: &DMatrix<f64>| DMatrix::from_fn(p, p, |i, j| m[(i, j)] / (sd[i] * sd[j]));
    // Work in the scaled coordinates D⁻¹(·)D⁻¹: traces of Vᵢ S̃⁻¹ are unchanged.
    let chol = Cholesky::new(scale(&s))?;
    let d = &m1.offset - &m2.offset;
    let dz = DVector::from_fn(p, |k, _| d[k] / sd[k]);
    let t2 = dz.dot(&chol.solve(&dz));
    let mut denom = 0.0;
    for (v, n) in [(&v1, n1), (&v2, n2)] {
        // A = S̃⁻¹ V has the same traces as V S̃⁻¹.
        let a = chol.solve(&scale(v));
        let tr = a.trace();
        let tr2: f64 = (0..p)
            .flat_map(|i| (0..p).map(move |j| (i, j)))
            .map(|(i, j)| a[(i, j)] * a[(j, i)])
            .sum();
        denom += (tr2 + tr * tr) / n;
    }
    let pf = p as f64;
    let nu = (pf + pf * pf) / denom;
    let df2 = nu - pf + 1.0;
    if !crate::stats::positive(df2) {
        return None;
    }
    let f = df2 / (nu * pf) * t2;
    Some(UnequalCovariance {
        t2,
        nu,
        f,
        df1: pf,
        df2,
        p_value: dist::f_sf(f, pf, df2),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::{DMatrix, DVector};

    /// Two lots with the same sample covariance matrix: Box's M is exactly zero (every
    /// log-determinant equals the pooled one) and its p-value 1.
    #[test]
    fn box_m_is_zero_for_equal_covariances() {
        let rows = [[1.0, 2.0], [2.0, 1.5], [3.0, 3.5], [4.0, 3.0], [5.0, 5.5]];
        let x = DMatrix::from_fn(5, 2, |i, k| rows[i][k]);
        let y = x.map(|v| v + 10.0);
        let origin = DVector::from_vec(vec![1.0, 2.0]);
        let (m1, _) = LotMoments::from_data_centred(&x, &origin);
        let (m2, _) = LotMoments::from_data_centred(&y, &origin);
        let b = box_m(&m1, &m2).expect("computable");
        assert!(b.m.abs() < 1e-10, "{}", b.m);
        assert!(b.p_value > 0.999_999, "{}", b.p_value);
    }

    /// A lot symmetric about its mean (every unit has its mirror image) has zero multivariate
    /// skewness, b1,p = 0 (Mardia 1970, the definition).
    #[test]
    fn mardia_skewness_is_zero_for_a_symmetric_lot() {
        let half = [
            [0.3, 1.2],
            [-0.7, 0.4],
            [1.1, -0.2],
            [0.5, 0.9],
            [-1.3, 0.1],
        ];
        let mut rows: Vec<[f64; 2]> = half.to_vec();
        rows.extend(half.iter().map(|r| [-r[0], -r[1]]));
        let mut z = DMatrix::from_fn(rows.len(), 2, |i, k| rows[i][k]);
        assert!(whiten_in_place(&mut z));
        let m = mardia("lot", &z);
        assert!(m.skewness.abs() < 1e-12, "{}", m.skewness);
    }
}
