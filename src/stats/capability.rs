//! Process capability of one lot against specification limits, per characteristic and for all
//! characteristics at once.
//!
//! # Per characteristic
//! With mean `x̄`, standard deviation `s` (divisor `n − 1`) and limits `L < U`:
//! `Cp = (U − L)/(6s)`, `CPU = (U − x̄)/(3s)`, `CPL = (x̄ − L)/(3s)`, `Cpk = min(CPU, CPL)`;
//! with one limit only `CPU` or `CPL` is defined. Intervals at confidence `1 − alpha`:
//! `Cp` by the chi-square interval of Chou, Owen & Borrego (1990, J. Qual. Technol. 22:223),
//! `[Cp sqrt(χ²_{α/2, n−1}/(n−1)), Cp sqrt(χ²_{1−α/2, n−1}/(n−1))]` (`χ²_q` the lower `q`
//! point); `Cpk`, `CPU` and `CPL` by Bissell's (1990, Applied Statistics 39:331) normal
//! approximation `C ± z_{1−α/2} sqrt(1/(9n) + C²/(2(n − 1)))` (derived for `Cpk`; the
//! one-sided indices have the same large-sample variance). Bissell's lower end can be
//! negative for small lots; it is reported as computed.
//!
//! Expected fraction out of specification under a normal model:
//! `P(X < L) = Φ̄((x̄ − L)/s)`, `P(X > U) = Φ̄((U − x̄)/s)`, each from the upper tail function
//! directly (never `1 − Φ`), so parts per million stay accurate far into the tails.
//!
//! # All characteristics at once
//! [`fraction_inside`]: `P(L ≤ X ≤ U)` for `X ~ N_p(μ, Σ)` by Genz's (1992, J. Comput. Graph.
//! Stat. 1:141) separation of variables, with the variable reordering of Gibson, Glasbey &
//! Elston (1994) as described by Genz & Bretz (2009, Computation of Multivariate Normal and t
//! Probabilities, §4.1.3), on a randomly shifted Kronecker lattice.
//!
//! One job, kept in one file: capability per characteristic and inside all limits share the limits and the normal model.

use nalgebra::{DMatrix, DVector};
use statrs::function::erf;

use super::dist;
use super::moments::LotMoments;
use super::permutation::SplitMix64;

/// Why a capability computation could not be done.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CapabilityError {
    /// Neither limit given.
    #[error("no specification limit given")]
    NoLimits,
    /// Limits reversed, equal or not finite.
    #[error("the specification limits must be finite with lower < upper (got {lower} and {upper})")]
    BadLimits {
        /// Lower limit.
        lower: f64,
        /// Upper limit.
        upper: f64,
    },
    /// Fewer than two units.
    #[error("capability needs at least two units (got {0})")]
    TooFewUnits(usize),
    /// Standard deviation zero or not finite.
    #[error("the standard deviation is {0}; capability needs a spread greater than zero")]
    NoSpread(f64),
    /// Alpha outside (0, 1).
    #[error("alpha must lie strictly between 0 and 1 (got {0})")]
    BadAlpha(f64),
    /// A mean or limit is NaN, or a mean is infinite.
    #[error("{what} is not a number that can be used ({value})")]
    BadValue {
        /// Which input.
        what: &'static str,
        /// Its value.
        value: f64,
    },
    /// Vector and matrix sizes do not agree.
    #[error("expected {expected} values, got {got}")]
    DimensionMismatch {
        /// Expected length.
        expected: usize,
        /// Given length.
        got: usize,
    },
    /// The covariance matrix is not positive definite.
    #[error(
        "the covariance matrix is not positive definite (characteristic {0} is a combination of the others)"
    )]
    NotPositiveDefinite(usize),
    /// Fewer than two shifts or no points.
    #[error("the quasi-Monte Carlo rule needs at least two shifts and one point")]
    BadSettings,
}

/// Specification limits of one characteristic; either may be absent (one-sided).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize, serde::Deserialize)]
pub struct SpecLimits {
    /// Lower limit.
    pub lower: Option<f64>,
    /// Upper limit.
    pub upper: Option<f64>,
}

impl SpecLimits {
    fn check(&self) -> Result<(), CapabilityError> {
        match (self.lower, self.upper) {
            (None, None) => Err(CapabilityError::NoLimits),
            (Some(l), Some(u)) if !(l.is_finite() && u.is_finite() && l < u) => {
                Err(CapabilityError::BadLimits { lower: l, upper: u })
            }
            (Some(v), None) | (None, Some(v)) if !v.is_finite() => Err(CapabilityError::BadValue {
                what: "specification limit",
                value: v,
            }),
            _ => Ok(()),
        }
    }

    /// The limits as numbers, `−∞`/`+∞` for an absent side.
    pub fn bounds(&self) -> (f64, f64) {
        (
            self.lower.unwrap_or(f64::NEG_INFINITY),
            self.upper.unwrap_or(f64::INFINITY),
        )
    }
}

/// A capability index with its `1 − alpha` interval.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct IndexEstimate {
    /// Point estimate.
    pub value: f64,
    /// Lower end of the interval.
    pub lower: f64,
    /// Upper end of the interval.
    pub upper: f64,
}

/// Capability of one characteristic in one lot.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Capability {
    /// Units.
    pub n: usize,
    /// Mean.
    pub mean: f64,
    /// Standard deviation (divisor `n − 1`).
    pub sd: f64,
    /// `1 − alpha` is the confidence of the intervals.
    pub alpha: f64,
    /// `Cp` (both limits only), chi-square interval.
    pub cp: Option<IndexEstimate>,
    /// `Cpk` (both limits only), Bissell interval.
    pub cpk: Option<IndexEstimate>,
    /// `CPU` (upper limit given), Bissell interval.
    pub cpu: Option<IndexEstimate>,
    /// `CPL` (lower limit given), Bissell interval.
    pub cpl: Option<IndexEstimate>,
    /// Expected parts per million below the lower limit (normal model).
    pub expected_below_ppm: Option<f64>,
    /// Expected parts per million above the upper limit (normal model).
    pub expected_above_ppm: Option<f64>,
    /// Expected parts per million outside the limits (sum of the two sides given).
    pub expected_ppm: f64,
}

/// Lower `q` point of the standard normal distribution, `Φ⁻¹(q)` (`−√2 erfc⁻¹(2q)`, statrs'
/// rational approximations; exact tails: `q = 1e-300` is fine).
pub fn norm_quantile(q: f64) -> f64 {
    -std::f64::consts::SQRT_2 * erf::erfc_inv(2.0 * q)
}

/// Upper `q` point of the standard normal distribution, `Φ̄⁻¹(q) = −Φ⁻¹(q)`.
pub fn norm_upper_quantile(q: f64) -> f64 {
    std::f64::consts::SQRT_2 * erf::erfc_inv(2.0 * q)
}

/// Lower `q` point of the chi-square distribution with `k` degrees of freedom. For `q ≤ ½`
/// it solves `P(k/2, x/2) = q` on the lower regularized gamma function (so small `q` keep
/// their relative precision); above, it is [`dist::chi2_isf`]`(1 − q, k)`.
pub fn chi2_quantile(q: f64, k: f64) -> f64 {
    if !(q > 0.0 && q < 1.0 && k > 0.0) {
        return f64::NAN;
    }
    if q > 0.5 {
        return dist::chi2_isf(1.0 - q, k);
    }
    let ln_q = q.ln();
    let g = |x: f64| {
        if !x.is_finite() {
            return f64::INFINITY;
        }
        if x <= 0.0 {
            return f64::NEG_INFINITY;
        }
        statrs::function::gamma::gamma_lr(0.5 * k, 0.5 * x).ln() - ln_q
    };
    dist::increasing_root(g, k, 1e-15).unwrap_or(f64::NAN)
}

fn bissell(c: f64, n: f64, z: f64) -> IndexEstimate {
    let half = z * (1.0 / (9.0 * n) + c * c / (2.0 * (n - 1.0))).sqrt();
    IndexEstimate {
        value: c,
        lower: c - half,
        upper: c + half,
    }
}

/// Capability indices, their intervals and the expected fraction out of specification from
/// a lot's size, mean and standard deviation (formulas in the module documentation).
pub fn capability(
    n: usize,
    mean: f64,
    sd: f64,
    limits: SpecLimits,
    alpha: f64,
) -> Result<Capability, CapabilityError> {
    limits.check()?;
    if !(alpha > 0.0 && alpha < 1.0) {
        return Err(CapabilityError::BadAlpha(alpha));
    }
    if n < 2 {
        return Err(CapabilityError::TooFewUnits(n));
    }
    if !mean.is_finite() {
        return Err(CapabilityError::BadValue {
            what: "mean",
            value: mean,
        });
    }
    if !(sd.is_finite() && sd > 0.0) {
        return Err(CapabilityError::NoSpread(sd));
    }
    let nf = n as f64;
    let nu = nf - 1.0;
    let z = norm_upper_quantile(0.5 * alpha);
    let cpu = limits
        .upper
        .map(|u| bissell((u - mean) / (3.0 * sd), nf, z));
    let cpl = limits
        .lower
        .map(|l| bissell((mean - l) / (3.0 * sd), nf, z));
    let (cp, cpk) = match (limits.lower, limits.upper) {
        (Some(l), Some(u)) => {
            let cp = (u - l) / (6.0 * sd);
            let lo = cp * (chi2_quantile(0.5 * alpha, nu) / nu).sqrt();
            let hi = cp * (dist::chi2_isf(0.5 * alpha, nu) / nu).sqrt();
            let k = ((u - mean) / (3.0 * sd)).min((mean - l) / (3.0 * sd));
            (
                Some(IndexEstimate {
                    value: cp,
                    lower: lo,
                    upper: hi,
                }),
                Some(bissell(k, nf, z)),
            )
        }
        _ => (None, None),
    };
    let expected_below_ppm = limits.lower.map(|l| 1e6 * dist::norm_sf((mean - l) / sd));
    let expected_above_ppm = limits.upper.map(|u| 1e6 * dist::norm_sf((u - mean) / sd));
    let expected_ppm = expected_below_ppm.unwrap_or(0.0) + expected_above_ppm.unwrap_or(0.0);
    Ok(Capability {
        n,
        mean,
        sd,
        alpha,
        cp,
        cpk,
        cpu,
        cpl,
        expected_below_ppm,
        expected_above_ppm,
        expected_ppm,
    })
}

/// Capability of characteristic `k` of a lot (absolute mean `origin + offset`, standard
/// deviation from the centred cross-products).
pub fn capability_moments(
    m: &LotMoments,
    k: usize,
    limits: SpecLimits,
    alpha: f64,
) -> Result<Capability, CapabilityError> {
    if m.n < 2 {
        return Err(CapabilityError::TooFewUnits(m.n));
    }
    let sd = (m.ssp[(k, k)] / (m.n - 1) as f64).sqrt();
    capability(m.n, m.origin[k] + m.offset[k], sd, limits, alpha)
}

/// Units observed outside the specification limits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct ObservedOutOfSpec {
    /// Values considered (NaN values are skipped).
    pub n: usize,
    /// Values strictly below the lower limit.
    pub below: usize,
    /// Values strictly above the upper limit.
    pub above: usize,
}

impl ObservedOutOfSpec {
    /// `below + above`.
    pub fn outside(&self) -> usize {
        self.below + self.above
    }

    /// Observed parts per million outside (NaN for no values).
    pub fn ppm(&self) -> f64 {
        if self.n == 0 {
            f64::NAN
        } else {
            1e6 * self.outside() as f64 / self.n as f64
        }
    }
}

/// Counts the values strictly outside the limits (a value equal to a limit is inside).
pub fn observed_out_of_spec(values: &[f64], limits: SpecLimits) -> ObservedOutOfSpec {
    let (lo, hi) = limits.bounds();
    let mut out = ObservedOutOfSpec {
        n: 0,
        below: 0,
        above: 0,
    };
    for &v in values {
        if v.is_nan() {
            continue;
        }
        out.n += 1;
        if v < lo {
            out.below += 1;
        } else if v > hi {
            out.above += 1;
        }
    }
    out
}

// ---------------------------------------------------------------------------------------
// Fraction inside all limits under a multivariate normal model
// ---------------------------------------------------------------------------------------

/// Settings of the randomized quasi-Monte Carlo rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct QmcSettings {
    /// Independent random shifts of the lattice (the error estimate uses their spread).
    pub shifts: usize,
    /// Lattice points per shift (each used with its antithetic partner).
    pub points: usize,
    /// Seed of the shifts.
    pub seed: u64,
}

impl Default for QmcSettings {
    fn default() -> Self {
        QmcSettings {
            shifts: 20,
            points: 2000,
            seed: 0x005E_ED0F_1075,
        }
    }
}

/// `P(L ≤ X ≤ U)` with its error estimate.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct InsideFraction {
    /// Estimated probability of a unit inside every limit.
    pub probability: f64,
    /// Three standard errors of the estimate over the shifts (about 99.7% coverage if the
    /// shift estimates were normal); 0 when the answer is exact (one characteristic, or a
    /// diagonal covariance).
    pub error: f64,
    /// Shifts used.
    pub shifts: usize,
    /// Points per shift.
    pub points: usize,
}

/// `(P(lo < Z < hi), sample)` for one conditional standard normal coordinate: the
/// probability, and a closure-free sampler `Φ⁻¹(Φ(lo) + w·P)` evaluated in the tail where it
/// keeps its digits.
#[inline]
fn interval_and_sample(lo: f64, hi: f64, w: Option<f64>) -> (f64, f64) {
    const TOP: f64 = 1.0 - f64::EPSILON / 2.0;
    if lo > 0.0 {
        let (qa, qb) = (dist::norm_sf(lo), dist::norm_sf(hi));
        let prob = (qa - qb).max(0.0);
        let y = w.map_or(0.0, |w| {
            let u = (qa - w * prob).clamp(f64::MIN_POSITIVE, TOP);
            norm_upper_quantile(u)
        });
        (prob, y)
    } else {
        let (pa, pb) = (dist::norm_sf(-lo), dist::norm_sf(-hi));
        let prob = (pb - pa).max(0.0);
        let y = w.map_or(0.0, |w| {
            let u = (pa + w * prob).clamp(f64::MIN_POSITIVE, TOP);
            norm_quantile(u)
        });
        (prob, y)
    }
}

/// Standard normal density.
fn phi(z: f64) -> f64 {
    if z.is_infinite() {
        0.0
    } else {
        (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt()
    }
}

/// The first `k` primes.
fn primes(k: usize) -> Vec<u64> {
    let mut out = Vec::with_capacity(k);
    let mut c = 2u64;
    while out.len() < k {
        if out
            .iter()
            .take_while(|&&q| q * q <= c)
            .all(|&q| !c.is_multiple_of(q))
        {
            out.push(c);
        }
        c += 1;
    }
    out
}

/// Probability that a unit from `N_p(mean, covariance)` lies inside every limit
/// (`lower[k] ≤ X_k ≤ upper[k]`, `±∞` allowed), by Genz's (1992) method.
///
/// # Method
/// `Σ = L Lᵀ` is factored with the variables reordered as it goes (at each step the variable
/// with the smallest conditional interval probability comes next, its conditioning values
/// set to the truncated-normal means; Genz & Bretz 2009, §4.1.3). Then
/// `P = ∫_{[0,1]^{p−1}} Π_k (e_k − d_k) dw` with `d_k = Φ((a_k − Σ_{j<k} l_kj y_j)/l_kk)`,
/// `e_k` the same with `b_k`, and `y_j = Φ⁻¹(d_j + w_j (e_j − d_j))`. The integral is taken on
/// the Kronecker lattice `w = frac(i √q + Δ)` (`q` the first `p − 1` primes, `i = 1..points`),
/// with the tent transform `|2w − 1|` and antithetic pairs `w, 1 − w`, over `shifts`
/// independent uniform shifts `Δ` drawn by SplitMix64 from `seed` (Genz's randomized
/// Richtmyer rule). The estimate is the mean over shifts; the error is three standard errors
/// of that mean. Deterministic for a given seed. With a diagonal covariance the integrand is
/// constant and the answer is the exact product of the marginal probabilities.
pub fn fraction_inside(
    mean: &DVector<f64>,
    covariance: &DMatrix<f64>,
    lower: &[f64],
    upper: &[f64],
    settings: QmcSettings,
) -> Result<InsideFraction, CapabilityError> {
    let p = mean.len();
    for got in [
        covariance.nrows(),
        covariance.ncols(),
        lower.len(),
        upper.len(),
    ] {
        if got != p {
            return Err(CapabilityError::DimensionMismatch { expected: p, got });
        }
    }
    if p == 0 {
        return Err(CapabilityError::DimensionMismatch {
            expected: 1,
            got: 0,
        });
    }
    if settings.shifts < 2 || settings.points == 0 {
        return Err(CapabilityError::BadSettings);
    }
    let mut a = Vec::with_capacity(p);
    let mut b = Vec::with_capacity(p);
    for k in 0..p {
        if !mean[k].is_finite() {
            return Err(CapabilityError::BadValue {
                what: "mean",
                value: mean[k],
            });
        }
        let (lo, hi) = (lower[k], upper[k]);
        if lo.is_nan() || hi.is_nan() || lo > hi {
            return Err(CapabilityError::BadLimits {
                lower: lo,
                upper: hi,
            });
        }
        a.push(lo - mean[k]);
        b.push(hi - mean[k]);
    }
    let exact = |probability| InsideFraction {
        probability,
        error: 0.0,
        shifts: settings.shifts,
        points: settings.points,
    };
    if (0..p).any(|k| a[k] == b[k]) {
        return Ok(exact(0.0));
    }
    // Reordered Cholesky factor (rows of the lower triangle) and expected conditioning values.
    let mut c = covariance.clone();
    let mut l = vec![vec![0.0; p]; p];
    let mut y = vec![0.0; p];
    let mut diagonal = true;
    for i in 0..p {
        let (mut best, mut best_prob) = (i, f64::INFINITY);
        for j in i..p {
            let var = c[(j, j)] - (0..i).map(|k| l[j][k] * l[j][k]).sum::<f64>();
            if !(var > 1e-12 * c[(j, j)].abs() && var.is_finite()) {
                return Err(CapabilityError::NotPositiveDefinite(j));
            }
            let sd = var.sqrt();
            let s: f64 = (0..i).map(|k| l[j][k] * y[k]).sum();
            let (prob, _) = interval_and_sample((a[j] - s) / sd, (b[j] - s) / sd, None);
            if prob < best_prob {
                best = j;
                best_prob = prob;
            }
        }
        if best != i {
            a.swap(i, best);
            b.swap(i, best);
            c.swap_rows(i, best);
            c.swap_columns(i, best);
            l.swap(i, best);
        }
        let var = c[(i, i)] - (0..i).map(|k| l[i][k] * l[i][k]).sum::<f64>();
        let lii = var.sqrt();
        l[i][i] = lii;
        for r in i + 1..p {
            let v = (c[(r, i)] - (0..i).map(|k| l[r][k] * l[i][k]).sum::<f64>()) / lii;
            if v != 0.0 {
                diagonal = false;
            }
            l[r][i] = v;
        }
        let s: f64 = (0..i).map(|k| l[i][k] * y[k]).sum();
        let (lo, hi) = ((a[i] - s) / lii, (b[i] - s) / lii);
        let (prob, _) = interval_and_sample(lo, hi, None);
        y[i] = if prob > 0.0 {
            (phi(lo) - phi(hi)) / prob
        } else if lo.is_finite() {
            lo
        } else {
            hi
        };
    }
    let integrand = |w: &[f64], ys: &mut [f64]| {
        let mut prod = 1.0;
        for i in 0..p {
            let row = &l[i];
            let s: f64 = (0..i).map(|k| row[k] * ys[k]).sum();
            let (lo, hi) = ((a[i] - s) / row[i], (b[i] - s) / row[i]);
            let last = i + 1 == p;
            let (prob, yi) = interval_and_sample(lo, hi, if last { None } else { Some(w[i]) });
            prod *= prob;
            if last || prod == 0.0 {
                break;
            }
            ys[i] = yi;
        }
        prod
    };
    if p == 1 || diagonal {
        let mut ys = vec![0.0; p];
        let w = vec![0.5; p];
        return Ok(exact(integrand(&w, &mut ys)));
    }
    let dims = p - 1;
    let z: Vec<f64> = primes(dims)
        .iter()
        .map(|&q| (q as f64).sqrt().fract())
        .collect();
    let mut rng = SplitMix64(settings.seed);
    let mut w = vec![0.0; dims];
    let mut w_anti = vec![0.0; dims];
    let mut ys = vec![0.0; p];
    let mut estimates = Vec::with_capacity(settings.shifts);
    for _ in 0..settings.shifts {
        let shift: Vec<f64> = (0..dims)
            .map(|_| (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64))
            .collect();
        let mut total = 0.0;
        for i in 1..=settings.points {
            let fi = i as f64;
            for d in 0..dims {
                let x = (fi * z[d] + shift[d]).fract();
                let t = (2.0 * x - 1.0).abs();
                w[d] = t;
                w_anti[d] = 1.0 - t;
            }
            total += 0.5 * (integrand(&w, &mut ys) + integrand(&w_anti, &mut ys));
        }
        estimates.push(total / settings.points as f64);
    }
    let m = estimates.len() as f64;
    let mean_est = estimates.iter().sum::<f64>() / m;
    let var = estimates
        .iter()
        .map(|e| (e - mean_est) * (e - mean_est))
        .sum::<f64>()
        / (m - 1.0);
    Ok(InsideFraction {
        probability: mean_est.clamp(0.0, 1.0),
        error: 3.0 * (var / m).sqrt(),
        shifts: settings.shifts,
        points: settings.points,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn first_primes() {
        assert_eq!(primes(10), vec![2, 3, 5, 7, 11, 13, 17, 19, 23, 29]);
    }

    #[test]
    fn conditional_samples_stay_inside_their_interval() {
        // Φ⁻¹(Φ(lo) + w (Φ(hi) − Φ(lo))) runs from lo (w = 0) to hi (w = 1) inside (lo, hi),
        // in either tail.
        for &(lo, hi) in &[
            (-1.0, 2.0),
            (3.0, 7.5),
            (-9.0, -6.0),
            (f64::NEG_INFINITY, 0.4),
        ] {
            let (prob, _) = interval_and_sample(lo, hi, None);
            assert!(prob > 0.0);
            let mut last = lo;
            for k in 1..10 {
                let w = k as f64 / 10.0;
                let (_, y) = interval_and_sample(lo, hi, Some(w));
                assert!(y > last && y < hi, "{lo} {hi} {w}: {y}");
                last = y;
            }
            let (_, mid) = interval_and_sample(lo, hi, Some(0.5));
            let below = if lo > 0.0 {
                dist::norm_sf(lo) - dist::norm_sf(mid)
            } else {
                dist::norm_sf(-mid) - dist::norm_sf(-lo)
            };
            assert!((below / prob - 0.5).abs() < 1e-9, "{lo} {hi}");
        }
    }

    #[test]
    fn chi_square_lower_points_invert_the_lower_tail() {
        for &(q, k) in &[(1e-12, 3.0), (0.025, 9.0), (0.4, 120.0), (0.975, 30.0)] {
            let x = chi2_quantile(q, k);
            let lower = statrs::function::gamma::gamma_lr(0.5 * k, 0.5 * x);
            assert!(((lower - q) / q).abs() < 1e-12, "{q} {k}: {lower}");
        }
    }
}
