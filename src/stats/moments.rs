//! Sufficient statistics of a lot: size, mean and centred cross-products, kept relative to
//! a common origin so lots far from zero lose no digits.

use nalgebra::{DMatrix, DVector};

/// Sufficient statistics of one lot for `p` characteristics.
///
/// The mean is stored as `origin + offset`: `origin` is shared by both lots of a comparison
/// (the first unit of the first lot, or the first lot's mean for summary input), so the mean
/// difference is `offset1 − offset2`, computed without cancelling the large common part.
#[derive(Debug, Clone)]
pub struct LotMoments {
    /// Number of units.
    pub n: usize,
    /// Common origin the offsets are measured from.
    pub origin: DVector<f64>,
    /// Mean minus origin.
    pub offset: DVector<f64>,
    /// Centred sums of squares and cross-products, `Σ (x − x̄)(x − x̄)ᵀ`.
    pub ssp: DMatrix<f64>,
    /// Largest `|x − origin|` per characteristic: the scale against which a spread counts as zero.
    pub spread_scale: DVector<f64>,
}

impl LotMoments {
    /// From unit data (`n × p`, one row per unit), shifted by `origin` before summing and
    /// centred before forming cross-products. Also returns the centred data.
    pub fn from_data_centred(x: &DMatrix<f64>, origin: &DVector<f64>) -> (Self, DMatrix<f64>) {
        let (n, p) = x.shape();
        let mut centred = DMatrix::<f64>::zeros(n, p);
        let mut offset = DVector::zeros(p);
        let mut spread_scale = DVector::zeros(p);
        for k in 0..p {
            let o = origin[k];
            let col = x.column(k);
            let (m, _, scale) = column_moments(col.as_slice(), o);
            for (dst, &v) in centred.column_mut(k).iter_mut().zip(col.iter()) {
                *dst = (v - o) - m;
            }
            offset[k] = m;
            spread_scale[k] = scale;
        }
        let ssp = super::blocked::cross_products(&centred);
        (
            LotMoments {
                n,
                origin: origin.clone(),
                offset,
                ssp,
                spread_scale,
            },
            centred,
        )
    }

    /// Centres `x` in place (`x − origin − offset`, the same arithmetic as
    /// [`LotMoments::from_data_centred`]) and returns its moments.
    pub fn centre_in_place(x: &mut DMatrix<f64>, origin: &DVector<f64>) -> Self {
        let (n, p) = x.shape();
        let mut offset = DVector::zeros(p);
        let mut spread_scale = DVector::zeros(p);
        for k in 0..p {
            let o = origin[k];
            let (m, _, scale) = column_moments(x.column(k).as_slice(), o);
            for v in x.column_mut(k).iter_mut() {
                *v = (*v - o) - m;
            }
            offset[k] = m;
            spread_scale[k] = scale;
        }
        let ssp = super::blocked::cross_products(x);
        LotMoments {
            n,
            origin: origin.clone(),
            offset,
            ssp,
            spread_scale,
        }
    }

    /// From published summary statistics: size, mean vector and unbiased covariance matrix.
    pub fn from_summary(
        n: usize,
        mean: &DVector<f64>,
        covariance: &DMatrix<f64>,
        origin: &DVector<f64>,
    ) -> Self {
        let offset = mean - origin;
        let ssp = covariance * (n.saturating_sub(1) as f64);
        let spread_scale = DVector::from_iterator(
            mean.len(),
            (0..mean.len()).map(|k| offset[k].abs() + covariance[(k, k)].max(0.0).sqrt()),
        );
        LotMoments {
            n,
            origin: origin.clone(),
            offset,
            ssp,
            spread_scale,
        }
    }

    /// Number of characteristics.
    pub fn dim(&self) -> usize {
        self.offset.len()
    }

    /// The mean vector (origin + offset); use `offset` for differences.
    pub fn mean(&self) -> DVector<f64> {
        &self.origin + &self.offset
    }

    /// Unbiased covariance matrix (divisor `n − 1`); zero for a single unit.
    pub fn covariance(&self) -> DMatrix<f64> {
        if self.n < 2 {
            return DMatrix::zeros(self.dim(), self.dim());
        }
        &self.ssp / (self.n - 1) as f64
    }
}

/// Mean of `v − o` (a corrected two-pass mean), the centred sum of squares, and the largest
/// `|v − o|` of one column.
fn column_moments(col: &[f64], o: f64) -> (f64, f64, f64) {
    let n = col.len();
    if n == 0 {
        return (0.0, 0.0, 0.0);
    }
    let mut sum = 0.0;
    let mut scale = 0.0_f64;
    for &v in col {
        let s = v - o;
        sum += s;
        scale = scale.max(s.abs());
    }
    let mean = sum / n as f64;
    // Second pass removes the rounding error of the first.
    let resid: f64 = col.iter().map(|&v| (v - o) - mean).sum();
    let mean = mean + resid / n as f64;
    let ss: f64 = col.iter().map(|&v| ((v - o) - mean).powi(2)).sum();
    (mean, ss, scale)
}

/// Five-number style summary of one characteristic in one lot.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ColumnSummary {
    /// Units used.
    pub n: usize,
    /// Mean.
    pub mean: f64,
    /// Standard deviation (divisor `n − 1`).
    pub sd: f64,
    /// Smallest value.
    pub min: f64,
    /// Median (mean of the two middle values for even `n`).
    pub median: f64,
    /// Largest value.
    pub max: f64,
    /// Decimal places the values carry (the data's resolution), when they have at most 9.
    #[serde(default)]
    pub decimals: Option<u8>,
}

/// The resolution of two lots' data on one characteristic: the finer (more places) of the
/// two, when both are known or either is.
pub fn finer_decimals(a: Option<u8>, b: Option<u8>) -> Option<u8> {
    match (a, b) {
        (Some(x), Some(y)) => Some(x.max(y)),
        (x, y) => x.or(y),
    }
}

/// The number of decimal places the measurements carry, read off the values themselves: the
/// fewest `d ≤ 9` such that every value (of the first 2,000) times `10^d` is a whole number
/// to within the rounding of its decimal reading. `None` for no values or for values with
/// more places (computed rather than measured numbers).
pub fn resolution_decimals(values: &[f64]) -> Option<u8> {
    let sample: Vec<f64> = values
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .take(2000)
        .collect();
    if sample.is_empty() {
        return None;
    }
    (0u8..=9).find(|&d| {
        let scale = 10f64.powi(i32::from(d));
        sample.iter().all(|&v| {
            let x = v * scale;
            // A decimal reading is off by half an ulp, and the scaling adds another.
            (x - x.round()).abs() <= 8.0 * f64::EPSILON * x.abs().max(1.0)
        })
    })
}

/// Summary of one column; `mean` and `ssp_kk` come from [`LotMoments`].
pub fn column_summary(values: &[f64], mean: f64, ssp_kk: f64) -> ColumnSummary {
    let n = values.len();
    let mut sorted = values.to_vec();
    let (min, median, max) = if n == 0 {
        (f64::NAN, f64::NAN, f64::NAN)
    } else {
        let mid = n / 2;
        let (lower, m, _) = sorted.select_nth_unstable_by(mid, f64::total_cmp);
        let m = *m;
        let median = if n % 2 == 1 {
            m
        } else {
            let below = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            0.5 * (below + m)
        };
        let min = values.iter().copied().fold(f64::INFINITY, f64::min);
        let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (min, median, max)
    };
    let sd = if n > 1 {
        (ssp_kk / (n - 1) as f64).sqrt()
    } else {
        f64::NAN
    };
    ColumnSummary {
        n,
        mean,
        sd,
        min,
        median,
        max,
        decimals: resolution_decimals(values),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn resolution_is_read_off_the_values() {
        // Values as a gauge writes them (decimal readings, so not exact binary fractions).
        assert_eq!(resolution_decimals(&[24.812, 24.8, 25.0, 24.999]), Some(3));
        assert_eq!(resolution_decimals(&[12.0, 13.0, f64::NAN]), Some(0));
        assert_eq!(resolution_decimals(&[0.1 + 0.2]), Some(1));
        assert_eq!(resolution_decimals(&[1.0 / 3.0]), None);
        // Far from zero the last places still count.
        assert_eq!(
            resolution_decimals(&[1_000_000.123_4, 1_000_000.5]),
            Some(4)
        );
        assert_eq!(resolution_decimals(&[]), None);
    }

    #[test]
    fn median_of_even_and_odd_counts() {
        // Definition of the median.
        let s = column_summary(&[4.0, 1.0, 3.0, 2.0], 2.5, 5.0);
        assert_eq!((s.min, s.median, s.max), (1.0, 2.5, 4.0));
        let s = column_summary(&[5.0, 1.0, 3.0], 3.0, 8.0);
        assert_eq!(s.median, 3.0);
        assert_eq!(s.sd, 2.0);
    }

    #[test]
    fn far_from_zero_keeps_its_digits() {
        // Property: shifting the data by a constant changes no centred quantity.
        // Multiples of 2^-10 are exact both near zero and near 1e9.
        let base = [
            3.0 / 1024.0,
            -7.0 / 1024.0,
            11.0 / 1024.0,
            1.0 / 1024.0,
            -2.0 / 1024.0,
        ];
        let near = DMatrix::from_column_slice(5, 1, &base);
        let far = near.map(|v| v + 1.0e9);
        let (a, _) = LotMoments::from_data_centred(&near, &DVector::from_element(1, base[0]));
        let (b, _) = LotMoments::from_data_centred(&far, &DVector::from_element(1, far[0]));
        let rel = (a.ssp[(0, 0)] - b.ssp[(0, 0)]).abs() / a.ssp[(0, 0)];
        assert!(rel < 1e-12, "{rel}");
        assert_eq!(a.offset[0], b.offset[0]);
    }
}
