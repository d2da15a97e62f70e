//! Equivalence of two lots: two one-sided tests per characteristic, the multivariate
//! equivalence test on the Mahalanobis distance, and their power for planning.
//!
//! # Per characteristic: two one-sided tests (TOST)
//! Schuirmann (1987), J. Pharmacokin. Biopharm. 15:657. With `d = mean_a − mean_b` (the
//! caller chooses which lot is `a`), a margin `[lo, hi]` and standard error `se`,
//! `t_lo = (d − lo)/se` tests `H0: μa − μb ≤ lo` (p-value `P(T > t_lo)`) and
//! `t_hi = (d − hi)/se` tests `H0: μa − μb ≥ hi` (p-value `P(T < t_hi)`); the lots count as
//! equivalent when both reject, `p = max(p_lo, p_hi) < alpha`. This happens exactly when the
//! `1 − 2 alpha` interval `d ± t_{1−α, df} se` lies strictly inside `(lo, hi)`.
//! Pooled: `se² = s_p² (1/na + 1/nb)`, `df = na + nb − 2`; Welch: `se² = va/na + vb/nb`,
//! Welch–Satterthwaite `df`.
//!
//! # All characteristics at once
//! Wellek (2010), Testing Statistical Hypotheses of Equivalence and Noninferiority, 2nd ed.,
//! the two-sample T² equivalence test: `H0: Δ ≥ ε` against `H1: Δ < ε` with
//! `Δ² = (μ1 − μ2)ᵀ Σ⁻¹ (μ1 − μ2)`. `F = (N − p − 1)/((N − 2) p) · T²` follows the noncentral
//! `F'(p, N − p − 1, λ)` with `λ = n1 n2/N · Δ²`; the test rejects (equivalence) when `F` lies
//! below the lower `alpha` point of `F'(p, N − p − 1, n1 n2/N · ε²)`; its p-value is that
//! distribution's CDF at `F`.
//!
//! # Noncentral F in both far tails
//! [`ncf_lower_tail`] and [`ncf_upper_tail`] sum the Poisson(λ/2) mixture of incomplete beta
//! tails (Patnaik 1949; Lenth 1987, Applied Statistics AS 226), each tail with its own series
//! so that either keeps full relative precision when small; a tail above ½ is the complement
//! of the other series. One incomplete beta function (`dist::ln_inc_beta`) is evaluated
//! per series; the others follow from the recurrence
//! `I_x(a + 1, b) = I_x(a, b) − x^a (1 − x)^b / (a B(a, b))` run in the direction in which it
//! only adds positive terms, on numbers kept with a separate binary exponent so nothing
//! underflows. [`super::power::ncf_sf`] is this upper tail. The cost grows like `√λ`
//! (about a millisecond at `λ = 10⁶`), so the series is used up to [`NCF_SERIES_MAX_LAMBDA`];
//! beyond it Patnaik's two-moment central-F approximation is used (see [`ncf_lower_tail`]).
//!
//! One job, kept in one file: both equivalence tests, their power, and the noncentral F tails they rest on.

use nalgebra::DVector;
use statrs::function::gamma::ln_gamma;

use super::dist;
use super::hotelling::Pooled;
use super::moments::LotMoments;

/// Why an equivalence computation could not be done.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum EquivalenceError {
    /// Alpha outside its range (`(0, 0.5)` for TOST, whose interval is `1 − 2 alpha`).
    #[error("alpha must lie strictly between 0 and {max} (got {alpha})")]
    BadAlpha {
        /// The alpha given.
        alpha: f64,
        /// The largest admissible alpha (exclusive).
        max: f64,
    },
    /// The margin is empty, reversed or not finite.
    #[error("the equivalence margin must have lower < upper, both finite (got {lo} to {hi})")]
    BadMargin {
        /// Lower end.
        lo: f64,
        /// Upper end.
        hi: f64,
    },
    /// The margin does not contain zero, so it has no half-width around "no difference".
    #[error("the equivalence margin {lo} to {hi} does not contain zero")]
    MarginExcludesZero {
        /// Lower end.
        lo: f64,
        /// Upper end.
        hi: f64,
    },
    /// Too few units for the variance estimate the test needs.
    #[error("too few units: the lots have {na} and {nb}, and this test needs {needed}")]
    TooFewUnits {
        /// Units in lot a.
        na: usize,
        /// Units in lot b.
        nb: usize,
        /// What the test needs, in words.
        needed: &'static str,
    },
    /// The standard error is zero or not finite (no spread, or overflow).
    #[error("the standard error of the difference is {0}; the characteristic does not vary")]
    NoSpread(f64),
    /// A mean, variance, distance or sd is negative or not finite.
    #[error("{what} must be finite and non-negative (got {value})")]
    BadValue {
        /// Which input.
        what: &'static str,
        /// Its value.
        value: f64,
    },
    /// Lengths of vectors that should match do not.
    #[error("expected {expected} values, got {got}")]
    DimensionMismatch {
        /// Expected length.
        expected: usize,
        /// Given length.
        got: usize,
    },
}

fn check_alpha(alpha: f64, max: f64) -> Result<(), EquivalenceError> {
    if alpha > 0.0 && alpha < max {
        Ok(())
    } else {
        Err(EquivalenceError::BadAlpha { alpha, max })
    }
}

fn check_margin(margin: [f64; 2]) -> Result<(), EquivalenceError> {
    let [lo, hi] = margin;
    if lo.is_finite() && hi.is_finite() && lo < hi {
        Ok(())
    } else {
        Err(EquivalenceError::BadMargin { lo, hi })
    }
}

fn check_nonneg(what: &'static str, value: f64) -> Result<(), EquivalenceError> {
    if value.is_finite() && value >= 0.0 {
        Ok(())
    } else {
        Err(EquivalenceError::BadValue { what, value })
    }
}

// ---------------------------------------------------------------------------------------
// Two one-sided tests
// ---------------------------------------------------------------------------------------

/// One characteristic of one lot: size, mean and unbiased variance (divisor `n − 1`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SampleStats {
    /// Units.
    pub n: usize,
    /// Mean (any common origin: only differences of means are used).
    pub mean: f64,
    /// Unbiased variance; zero for a single unit.
    pub variance: f64,
}

impl SampleStats {
    /// Characteristic `k` of a lot's moments. The mean is `offset[k]`, the mean minus the
    /// origin the two lots of a comparison share, so the difference of two such means is
    /// free of cancellation; it is not the lot's absolute mean.
    pub fn from_moments(m: &LotMoments, k: usize) -> Self {
        let variance = if m.n > 1 {
            m.ssp[(k, k)] / (m.n - 1) as f64
        } else {
            0.0
        };
        SampleStats {
            n: m.n,
            mean: m.offset[k],
            variance,
        }
    }
}

/// How the standard error of the difference is formed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum VarianceModel {
    /// Common variance: `s_p² = ((na − 1) va + (nb − 1) vb)/(na + nb − 2)`, `df = na + nb − 2`.
    Pooled,
    /// Separate variances (Welch 1947): `se² = va/na + vb/nb`,
    /// `df = se⁴ / ((va/na)²/(na − 1) + (vb/nb)²/(nb − 1))` (Satterthwaite 1946).
    Welch,
}

/// Result of the two one-sided tests for one characteristic.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Tost {
    /// `d = mean_a − mean_b`.
    pub difference: f64,
    /// Standard error of `d`.
    pub standard_error: f64,
    /// Degrees of freedom of the t reference distribution.
    pub df: f64,
    /// `t_lo = (d − lo)/se`.
    pub t_lower: f64,
    /// `t_hi = (d − hi)/se`.
    pub t_upper: f64,
    /// `P(T > t_lo)`: p-value of `H0: μa − μb ≤ lo`.
    pub p_lower: f64,
    /// `P(T < t_hi)`: p-value of `H0: μa − μb ≥ hi`.
    pub p_upper: f64,
    /// `max(p_lower, p_upper)`.
    pub p_value: f64,
    /// The `1 − 2 alpha` interval `d ± t_{1−α, df} se`.
    pub interval: [f64; 2],
    /// `p_value < alpha` (equivalently, the interval lies strictly inside the margin).
    pub equivalent: bool,
}

/// One-sided upper tail `P(T > t)` of Student's t.
fn t_sf(t: f64, nu: f64) -> f64 {
    if t.is_nan() {
        return f64::NAN;
    }
    let two = dist::t_sf2(t, nu);
    if t >= 0.0 { 0.5 * two } else { 1.0 - 0.5 * two }
}

/// Two one-sided tests (Schuirmann 1987) of `d = a.mean − b.mean` against the margin
/// `[lo, hi]` at level `alpha` (`0 < alpha < 0.5`); formulas in the module documentation.
///
/// Pooled needs `na + nb ≥ 3`; Welch needs at least two units in each lot.
pub fn tost(
    a: SampleStats,
    b: SampleStats,
    margin: [f64; 2],
    alpha: f64,
    model: VarianceModel,
) -> Result<Tost, EquivalenceError> {
    check_alpha(alpha, 0.5)?;
    check_margin(margin)?;
    for (what, v) in [
        ("variance of lot a", a.variance),
        ("variance of lot b", b.variance),
    ] {
        check_nonneg(what, v)?;
    }
    for (what, v) in [("mean of lot a", a.mean), ("mean of lot b", b.mean)] {
        if !v.is_finite() {
            return Err(EquivalenceError::BadValue { what, value: v });
        }
    }
    let (na, nb) = (a.n as f64, b.n as f64);
    let too_few = |needed| EquivalenceError::TooFewUnits {
        na: a.n,
        nb: b.n,
        needed,
    };
    let (se, df) = match model {
        VarianceModel::Pooled => {
            if a.n == 0 || b.n == 0 || a.n + b.n < 3 {
                return Err(too_few("at least one unit per lot and three in all"));
            }
            let df = na + nb - 2.0;
            let sp2 = ((na - 1.0) * a.variance + (nb - 1.0) * b.variance) / df;
            ((sp2 * (1.0 / na + 1.0 / nb)).sqrt(), df)
        }
        VarianceModel::Welch => {
            if a.n < 2 || b.n < 2 {
                return Err(too_few("at least two units per lot"));
            }
            let (va, vb) = (a.variance / na, b.variance / nb);
            let s2 = va + vb;
            let df = s2 * s2 / (va * va / (na - 1.0) + vb * vb / (nb - 1.0));
            (s2.sqrt(), df)
        }
    };
    if !(se.is_finite() && se > 0.0 && df.is_finite()) {
        return Err(EquivalenceError::NoSpread(se));
    }
    let d = a.mean - b.mean;
    let [lo, hi] = margin;
    let t_lower = (d - lo) / se;
    let t_upper = (d - hi) / se;
    let p_lower = t_sf(t_lower, df);
    let p_upper = t_sf(-t_upper, df);
    let p_value = p_lower.max(p_upper);
    let tc = dist::t_isf2(2.0 * alpha, df);
    Ok(Tost {
        difference: d,
        standard_error: se,
        df,
        t_lower,
        t_upper,
        p_lower,
        p_upper,
        p_value,
        interval: [d - tc * se, d + tc * se],
        equivalent: p_value < alpha,
    })
}

/// TOST of characteristic `k` between two lots' moments (`d = m_a − m_b`, difference of the
/// offsets from their shared origin).
pub fn tost_moments(
    ma: &LotMoments,
    mb: &LotMoments,
    k: usize,
    margin: [f64; 2],
    alpha: f64,
    model: VarianceModel,
) -> Result<Tost, EquivalenceError> {
    tost(
        SampleStats::from_moments(ma, k),
        SampleStats::from_moments(mb, k),
        margin,
        alpha,
        model,
    )
}

/// Exact power of the pooled TOST at level `alpha` with `na`, `nb` units, a true difference
/// `theta` and a common standard deviation `sigma`.
///
/// Owen's (1965, Biometrika 52:437) exact form, written as one integral over the estimated
/// standard deviation: with `ν = na + nb − 2`, `k = 1/na + 1/nb`, `t_c = t_{1−α, ν}` and
/// `X ~ χ_ν` (so `ŝ = σ X/√ν`), independent of `d̂ ~ N(θ, σ² k)`,
/// `power = E[ max(0, Φ((hi − θ)/(σ√k) − t_c X/√ν) − Φ((lo − θ)/(σ√k) + t_c X/√ν)) ]`.
/// The integrand vanishes beyond `X = √ν (hi − lo)/(2 t_c σ √k)`; the expectation is taken by
/// 20-point Gauss–Legendre panels of width 1/4 over ±12 around the mode of the χ density
/// (mass outside below 1e-30), normalised by the same rule. No normal approximation is used.
pub fn tost_power(
    theta: f64,
    sigma: f64,
    na: usize,
    nb: usize,
    margin: [f64; 2],
    alpha: f64,
) -> Result<f64, EquivalenceError> {
    check_alpha(alpha, 0.5)?;
    check_margin(margin)?;
    if !theta.is_finite() {
        return Err(EquivalenceError::BadValue {
            what: "true difference",
            value: theta,
        });
    }
    if !(sigma.is_finite() && sigma > 0.0) {
        return Err(EquivalenceError::BadValue {
            what: "standard deviation",
            value: sigma,
        });
    }
    if na == 0 || nb == 0 || na + nb < 3 {
        return Err(EquivalenceError::TooFewUnits {
            na,
            nb,
            needed: "at least one unit per lot and three in all",
        });
    }
    let nu = (na + nb - 2) as f64;
    let se = sigma * (1.0 / na as f64 + 1.0 / nb as f64).sqrt();
    let tc = dist::t_isf2(2.0 * alpha, nu);
    let [lo, hi] = margin;
    let (ahi, alo) = ((hi - theta) / se, (lo - theta) / se);
    let slope = tc / nu.sqrt();
    let x_cut = (hi - lo) / (2.0 * se * slope);
    let mode = (nu - 1.0).max(0.0).sqrt();
    let ln_dens = |x: f64| {
        if mode > 0.0 {
            (nu - 1.0) * ((x - mode) / mode).ln_1p() - 0.5 * (x - mode) * (x + mode)
        } else {
            -0.5 * x * x
        }
    };
    let bracket = |x: f64| {
        let (big, small) = (ahi - slope * x, alo + slope * x);
        if big <= small {
            0.0
        } else if small > 0.0 {
            dist::norm_sf(small) - dist::norm_sf(big)
        } else if big < 0.0 {
            dist::norm_sf(-big) - dist::norm_sf(-small)
        } else {
            1.0 - dist::norm_sf(big) - dist::norm_sf(-small)
        }
    };
    let (x0, x1) = ((mode - 12.0).max(0.0), mode + 12.0);
    let (nodes, weights) = gauss_legendre(20);
    let integrate = |from: f64, to: f64, with_bracket: bool| {
        if to <= from {
            return 0.0;
        }
        let panels = ((to - from) / 0.25).ceil().max(1.0) as usize;
        let width = (to - from) / panels as f64;
        let mut total = 0.0;
        for k in 0..panels {
            let centre = from + (k as f64 + 0.5) * width;
            for (t, w) in nodes.iter().zip(&weights) {
                let x = centre + 0.5 * width * t;
                let mut v = ln_dens(x).exp();
                if with_bracket {
                    v *= bracket(x);
                }
                total += w * v;
            }
        }
        total * 0.5 * width
    };
    let norm = integrate(x0, x1, false);
    let part = integrate(x0, x1.min(x_cut), true);
    Ok((part / norm).clamp(0.0, 1.0))
}

/// Smallest equal number of units per lot for which the pooled TOST reaches power `target`
/// (power from [`tost_power`]). `None` when `theta` is not strictly inside the margin, when
/// the target is not in `(0, 1)`, or when no lot size up to 10⁸ reaches it.
pub fn tost_units_per_lot(
    theta: f64,
    sigma: f64,
    margin: [f64; 2],
    alpha: f64,
    target: f64,
) -> Option<usize> {
    let [lo, hi] = margin;
    if !(theta > lo && theta < hi && target > 0.0 && target < 1.0) {
        return None;
    }
    smallest_n(2, |n| {
        tost_power(theta, sigma, n, n, margin, alpha).is_ok_and(|p| p >= target)
    })
}

/// Smallest `n ≥ start` with `ok(n)` for a predicate that stays true once true: doubling,
/// then bisection. `None` above 10⁸.
pub(crate) fn smallest_n(start: usize, ok: impl Fn(usize) -> bool) -> Option<usize> {
    if ok(start) {
        return Some(start);
    }
    let mut hi = start * 2;
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

/// Gauss–Legendre nodes and weights on `[−1, 1]` by Newton's method on `P_n`
/// (Press et al., Numerical Recipes, 3rd ed., §4.6, `gauleg`).
fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut nodes = vec![0.0; n];
    let mut weights = vec![0.0; n];
    let nf = n as f64;
    for i in 0..n.div_ceil(2) {
        let mut z = (std::f64::consts::PI * (i as f64 + 0.75) / (nf + 0.5)).cos();
        let mut pp = 0.0;
        for _ in 0..100 {
            let (mut p1, mut p2) = (1.0, 0.0);
            for j in 0..n {
                let p3 = p2;
                p2 = p1;
                let jf = j as f64;
                p1 = ((2.0 * jf + 1.0) * z * p2 - jf * p3) / (jf + 1.0);
            }
            pp = nf * (z * p1 - p2) / (z * z - 1.0);
            let z1 = z;
            z = z1 - p1 / pp;
            if (z - z1).abs() < 1e-15 {
                break;
            }
        }
        nodes[i] = -z;
        nodes[n - 1 - i] = z;
        let w = 2.0 / ((1.0 - z * z) * pp * pp);
        weights[i] = w;
        weights[n - 1 - i] = w;
    }
    (nodes, weights)
}

// ---------------------------------------------------------------------------------------
// Noncentral F
// ---------------------------------------------------------------------------------------

/// Largest noncentrality for which the noncentral F is summed exactly; above it the tails use
/// Patnaik's approximation. At this λ one evaluation takes a few tens of milliseconds.
pub const NCF_SERIES_MAX_LAMBDA: f64 = 1e9;

/// Each Poisson tail left out is below this fraction of the sum.
const SERIES_EPS: f64 = 1e-17;

/// `ln P(J = j)` for `J ~ Poisson(h)`, through the deviance form
/// `−[j ln(j/h) + h − j] − ½ ln(2π j) − c(j)` for `j ≥ 10` (Loader 2000, "Fast and accurate
/// computation of binomial probabilities"), which avoids the cancellation of `j ln h` against
/// `ln j!` at large `h`.
fn ln_poisson(j: f64, h: f64) -> f64 {
    if j < 10.0 {
        if j == 0.0 {
            return -h;
        }
        return -h + j * h.ln() - ln_gamma(j + 1.0);
    }
    let v = (j - h) / h;
    let bd0 = h * ((1.0 + v) * v.ln_1p() - v);
    -bd0 - 0.5 * (std::f64::consts::TAU * j).ln() - dist::stirling_correction(j)
}

/// A positive number `m · 2^e` whose exponent cannot underflow or overflow: the series below
/// multiplies and adds ten thousands of factors, and doing so in logarithms would round each
/// step to the ulp of the logarithm (about 1e-13 for values near 1e-300), while products of
/// mantissas keep about 1e-16 per step. Rescaling is by exact powers of two.
#[derive(Debug, Clone, Copy)]
struct Scaled {
    m: f64,
    e: i64,
}

/// `2^k` for `|k| ≤ 1022`.
fn pow2(k: i64) -> f64 {
    f64::from_bits(((k + 1023) as u64) << 52)
}

impl Scaled {
    const ZERO: Scaled = Scaled { m: 0.0, e: 0 };

    fn norm(m: f64, e: i64) -> Scaled {
        if m == 0.0 || !m.is_finite() {
            return Scaled { m, e: 0 };
        }
        let k = ((m.to_bits() >> 52) & 0x7ff) as i64 - 1023;
        if k.abs() < 256 {
            return Scaled { m, e };
        }
        Scaled {
            m: m * pow2(-k),
            e: e + k,
        }
    }

    /// `exp(ln)`, finite for any finite `ln`.
    fn from_ln(ln: f64) -> Scaled {
        if ln == f64::NEG_INFINITY {
            return Scaled::ZERO;
        }
        let k = (ln / std::f64::consts::LN_2).floor();
        Scaled::norm((ln - k * std::f64::consts::LN_2).exp(), k as i64)
    }

    fn mul(self, f: f64) -> Scaled {
        Scaled::norm(self.m * f, self.e)
    }

    fn times(self, o: Scaled) -> Scaled {
        Scaled::norm(self.m * o.m, self.e + o.e)
    }

    fn add(self, o: Scaled) -> Scaled {
        if self.m == 0.0 {
            return o;
        }
        if o.m == 0.0 {
            return self;
        }
        let (big, small) = if self.e >= o.e { (self, o) } else { (o, self) };
        let shift = small.e - big.e;
        if shift < -1000 {
            return big;
        }
        Scaled::norm(big.m + small.m * pow2(shift), big.e)
    }

    fn ln(self) -> f64 {
        self.m.ln() + self.e as f64 * std::f64::consts::LN_2
    }
}

/// `ln[r/(1 − r)]` for `r < 1`: bound on a Poisson tail relative to its first weight when the
/// ratio of consecutive weights stays below `r`; `+∞` for `r ≥ 1`.
fn ln_geometric(r: f64) -> f64 {
    if r < 1.0 {
        r.ln() - (-r).ln_1p()
    } else {
        f64::INFINITY
    }
}

/// Hard cap on series terms (far above `40 √(λ/2)` for any λ the series is used for).
const MAX_TERMS: f64 = 5e7;

/// `ln P(F' ≤ f)` by the series, with `x = d1 f/(d1 f + d2)`, `y = 1 − x`.
fn ln_lower_series(x: f64, y: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    let (h, b) = (0.5 * lambda, 0.5 * d2);
    let m = h.floor();
    let ln_wm = ln_poisson(m, h);
    let ln_eps = SERIES_EPS.ln();
    // Forward from the mode to where the upper Poisson tail is negligible: every term beyond
    // has I_j below the one there, and the sum is at least w_m I_m ≥ w_m I_top.
    let (mut j, mut ln_w) = (m, ln_wm);
    while ln_w + ln_geometric(h / (j + 1.0)) > ln_eps + ln_wm {
        ln_w += (h / (j + 1.0)).ln();
        j += 1.0;
        if j - m > MAX_TERMS {
            return f64::NAN;
        }
    }
    let a = 0.5 * d1 + j;
    let (ln_i_top, _) = dist::ln_inc_beta(a, b, x, y);
    if ln_i_top.is_nan() {
        return f64::NAN;
    }
    let x_inv = 1.0 / x;
    let mut w = Scaled::from_ln(ln_poisson(j, h));
    let mut i = Scaled::from_ln(ln_i_top);
    // G_j = x^a y^b / (a B(a, b)) at a = d1/2 + j.
    let mut g = Scaled::from_ln(dist::ln_beta_front(a, b, x, y) - a.ln());
    let mut sum = Scaled::ZERO;
    loop {
        sum = sum.add(w.times(i));
        if j == 0.0 || w.ln() + ln_geometric(j / h) <= ln_eps + sum.ln() {
            break;
        }
        // To j − 1: G_{j−1} = G_j a_j/(x (a_j + b − 1)), I_{j−1} = I_j + G_{j−1}.
        let aj = 0.5 * d1 + j;
        g = g.mul(aj / (aj + b - 1.0) * x_inv);
        i = i.add(g);
        w = w.mul(j / h);
        j -= 1.0;
    }
    sum.ln().min(0.0)
}

/// `ln P(F' > f)` by the series.
fn ln_upper_series(x: f64, y: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    let (h, b) = (0.5 * lambda, 0.5 * d2);
    let m = h.floor();
    let ln_wm = ln_poisson(m, h);
    let ln_eps = SERIES_EPS.ln();
    // Backward from the mode to where the lower Poisson tail is negligible (the upper beta
    // tails grow with j, so every term before has a smaller one).
    let (mut j, mut ln_w) = (m, ln_wm);
    while j > 0.0 && ln_w + ln_geometric(j / h) > ln_eps + ln_wm {
        ln_w += (j / h).ln();
        j -= 1.0;
    }
    let a = 0.5 * d1 + j;
    let (_, ln_q_low) = dist::ln_inc_beta(a, b, x, y);
    if ln_q_low.is_nan() {
        return f64::NAN;
    }
    let mut w = Scaled::from_ln(ln_poisson(j, h));
    let mut q = Scaled::from_ln(ln_q_low);
    let mut g = Scaled::from_ln(dist::ln_beta_front(a, b, x, y) - a.ln());
    let mut sum = Scaled::ZERO;
    let start = j;
    loop {
        sum = sum.add(w.times(q));
        if w.ln() + ln_geometric(h / (j + 1.0)) <= ln_eps + sum.ln() {
            break;
        }
        if j - start > MAX_TERMS {
            return f64::NAN;
        }
        // To j + 1: Q_{j+1} = Q_j + G_j, G_{j+1} = G_j x (a_j + b)/(a_j + 1).
        let aj = 0.5 * d1 + j;
        q = q.add(g);
        g = g.mul(x * ((aj + b) / (aj + 1.0)));
        w = w.mul(h / (j + 1.0));
        j += 1.0;
    }
    sum.ln().min(0.0)
}

/// Patnaik's (1949, Biometrika 36:202) approximation: `χ'²_{d1}(λ) ≈ c χ²_k` with
/// `c = (d1 + 2λ)/(d1 + λ)`, `k = (d1 + λ)²/(d1 + 2λ)`, so `F' ≈ (c k/d1) F(k, d2)`.
/// Returns `(x, y)` of the matching central incomplete beta and its `a = k/2`.
fn patnaik(f: f64, d1: f64, d2: f64, lambda: f64) -> (f64, f64, f64) {
    let c = (d1 + 2.0 * lambda) / (d1 + lambda);
    let k = (d1 + lambda) * (d1 + lambda) / (d1 + 2.0 * lambda);
    let g = f * d1 / c; // = (c k / d1)⁻¹ f · k
    let den = g + d2;
    (g / den, d2 / den, 0.5 * k)
}

fn ncf_args(f: f64, d1: f64, d2: f64) -> (f64, f64) {
    let den = d1 * f + d2;
    (d1 * f / den, d2 / den)
}

/// `ln P(F' ≤ f)` (`upper` false) or `ln P(F' > f)` (`upper` true). Each series gives its own
/// tail with full relative precision; when that tail is the larger one (above ½), the other
/// series is summed too and the answer is its complement, so the larger tail is exact to
/// the last bits as well (a sum of thousands of terms near 1 would be good to some 1e-14
/// only).
fn ncf_ln_tail(f: f64, d1: f64, d2: f64, lambda: f64, upper: bool) -> f64 {
    if f.is_nan() || lambda.is_nan() || !(d1 > 0.0 && d2 > 0.0 && lambda >= 0.0) {
        return f64::NAN;
    }
    let pick = |(lo, up): (f64, f64)| if upper { up } else { lo };
    if f <= 0.0 {
        return pick((f64::NEG_INFINITY, 0.0));
    }
    if f.is_infinite() {
        return pick((0.0, f64::NEG_INFINITY));
    }
    if lambda > NCF_SERIES_MAX_LAMBDA {
        let (x, y, a) = patnaik(f, d1, d2, lambda);
        return pick(dist::ln_inc_beta(a, 0.5 * d2, x, y));
    }
    let (x, y) = ncf_args(f, d1, d2);
    if lambda == 0.0 {
        return pick(dist::ln_inc_beta(0.5 * d1, 0.5 * d2, x, y));
    }
    let (own, other): (SeriesFn, SeriesFn) = if upper {
        (ln_upper_series, ln_lower_series)
    } else {
        (ln_lower_series, ln_upper_series)
    };
    let first = own(x, y, d1, d2, lambda);
    if first.is_nan() || first <= -std::f64::consts::LN_2 {
        return first;
    }
    let complement = other(x, y, d1, d2, lambda);
    if complement.is_nan() {
        return first;
    }
    dist::ln_one_minus_exp(complement)
}

type SeriesFn = fn(f64, f64, f64, f64, f64) -> f64;

/// Natural logarithm of the lower tail `P(F' ≤ f)` of the noncentral F distribution with
/// `d1`, `d2` degrees of freedom and noncentrality `lambda`; finite (and accurate) far
/// below the smallest positive double.
pub fn ncf_ln_lower_tail(f: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    ncf_ln_tail(f, d1, d2, lambda, false)
}

/// Natural logarithm of the upper tail `P(F' > f)`; see [`ncf_ln_lower_tail`].
pub fn ncf_ln_upper_tail(f: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    ncf_ln_tail(f, d1, d2, lambda, true)
}

/// Lower tail (CDF) `P(F' ≤ f)` of the noncentral F distribution, with full relative
/// precision in the far lower tail.
///
/// `P(F' ≤ f) = Σⱼ e^{−λ/2} (λ/2)ʲ/j! · I_x(d1/2 + j, d2/2)`, `x = d1 f/(d1 f + d2)`. The
/// sum starts where the upper Poisson tail is below 1e-17 of the mode's weight (every term
/// beyond it is smaller still, since `I_x` falls with `j`), evaluates `I_x` there once and
/// walks down with `I_x(a − 1, b) = I_x(a, b) + G(a − 1)` (positive additions only), until
/// the remaining lower Poisson mass is below 1e-17 of the sum. Relative error about 1e-12 for
/// results above 1e-300 (the incomplete beta function's own accuracy at large parameters;
/// smaller results are representable only as subnormals or zero, use
/// [`ncf_ln_lower_tail`]).
///
/// For `λ > NCF_SERIES_MAX_LAMBDA` (`10⁹`) Patnaik's two-moment approximation
/// `F' ≈ (c k/d1) F(k, d2)` is used, `c = (d1 + 2λ)/(d1 + λ)`, `k = (d1 + λ)²/(d1 + 2λ)`: its
/// relative error in the central part is of order `λ^{−1/2}` (a few 1e-5 at the switch),
/// larger far in the tails. Such λ need lot sizes times ε² above 10⁹.
pub fn ncf_lower_tail(f: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    ncf_ln_lower_tail(f, d1, d2, lambda).exp()
}

/// Upper tail `P(F' > f)` of the noncentral F distribution, with full relative precision in
/// the far upper tail; the mirror image of [`ncf_lower_tail`] (walks up with
/// `1 − I_x(a + 1, b) = 1 − I_x(a, b) + G(a)`). Same accuracy and the same approximation
/// above [`NCF_SERIES_MAX_LAMBDA`].
pub fn ncf_upper_tail(f: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    ncf_ln_upper_tail(f, d1, d2, lambda).exp()
}

/// The `q` point of the noncentral F: the `f` with `P(F' ≤ f) = q`, solved on the log of the
/// smaller tail (Brent, relative tolerance 1e-14 in `f`). NaN when `q ∉ (0, 1)`.
pub fn ncf_quantile(q: f64, d1: f64, d2: f64, lambda: f64) -> f64 {
    if !(q > 0.0 && q < 1.0) {
        return f64::NAN;
    }
    let mean = (d1 + lambda) / d1 * if d2 > 2.0 { d2 / (d2 - 2.0) } else { 1.0 };
    let root = if q <= 0.5 {
        let ln_q = q.ln();
        dist::increasing_root(|f| ncf_ln_lower_tail(f, d1, d2, lambda) - ln_q, mean, 1e-14)
    } else {
        let ln_q = (-q).ln_1p();
        dist::increasing_root(|f| ln_q - ncf_ln_upper_tail(f, d1, d2, lambda), mean, 1e-14)
    };
    root.unwrap_or(f64::NAN)
}

// ---------------------------------------------------------------------------------------
// Multivariate equivalence
// ---------------------------------------------------------------------------------------

/// Result of the two-sample T² equivalence test (Wellek 2010).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct T2Equivalence {
    /// Hotelling's T² of `x̄1 − x̄2`.
    pub t2: f64,
    /// `F = (N − p − 1)/((N − 2) p) · T²`.
    pub f: f64,
    /// Numerator df, `p`.
    pub df1: f64,
    /// Denominator df, `N − p − 1`.
    pub df2: f64,
    /// Observed Mahalanobis distance `D = sqrt(dᵀ Sp⁻¹ d)`.
    pub distance: f64,
    /// The equivalence margin ε on the Mahalanobis distance.
    pub epsilon: f64,
    /// Noncentrality at the margin, `λ = n1 n2/N · ε²`.
    pub lambda: f64,
    /// Lower `alpha` point of `F'(p, N − p − 1, λ)`; equivalence when `F` lies below it.
    pub critical_f: f64,
    /// `P(F' ≤ F)` under `F'(p, N − p − 1, λ)`.
    pub p_value: f64,
    /// Upper `1 − alpha` confidence bound of `Δ` (see [`distance_upper_bound`]).
    pub upper_bound: f64,
    /// `p_value < alpha`; holds exactly when `upper_bound < epsilon`.
    pub equivalent: bool,
}

/// Upper `1 − alpha` confidence bound of the Mahalanobis distance `Δ` from an observed
/// `F` on `(d1, d2)` df with `n1`, `n2` units: the `Δ_u = sqrt(λ_u N/(n1 n2))` with
/// `P(F' ≤ F; λ_u) = alpha`. The CDF falls as λ grows, so the equivalence test at margin ε
/// rejects exactly when `ε > Δ_u`. When already `P(F ≤ F_obs; λ = 0) ≤ alpha` the test
/// rejects for every ε > 0 and the bound is 0. `None` on bad input.
pub fn distance_upper_bound(
    f: f64,
    d1: f64,
    d2: f64,
    n1: usize,
    n2: usize,
    alpha: f64,
) -> Option<f64> {
    if !(alpha > 0.0 && alpha < 1.0 && f >= 0.0 && f.is_finite() && d1 > 0.0 && d2 > 0.0) {
        return None;
    }
    let ln_alpha = alpha.ln();
    if ncf_ln_lower_tail(f, d1, d2, 0.0) <= ln_alpha {
        return Some(0.0);
    }
    let scale = (n1 as f64 * n2 as f64) / (n1 + n2) as f64;
    // g(λ) = ln α − ln CDF(F; λ) increases with λ.
    let start = (d1 * f).max(1.0);
    let lambda =
        dist::increasing_root(|l| ln_alpha - ncf_ln_lower_tail(f, d1, d2, l), start, 1e-13)?;
    Some((lambda / scale).sqrt())
}

/// Two-sample T² equivalence test (Wellek 2010) at margin `epsilon` on the Mahalanobis
/// distance and level `alpha`, from the lots' moments and their pooled covariance
/// (solves through [`Pooled::solve_corr`], no inverse).
pub fn t2_equivalence(
    m1: &LotMoments,
    m2: &LotMoments,
    pooled: &Pooled,
    epsilon: f64,
    alpha: f64,
) -> Result<T2Equivalence, EquivalenceError> {
    let p = m1.dim();
    if m2.dim() != p {
        return Err(EquivalenceError::DimensionMismatch {
            expected: p,
            got: m2.dim(),
        });
    }
    let d = &m1.offset - &m2.offset;
    let z = d.component_div(&pooled.sd);
    let d2 = z.dot(&pooled.solve_corr(&z)).max(0.0);
    t2_equivalence_from_distance(d2, p, m1.n, m2.n, epsilon, alpha)
}

/// The same test from the squared Mahalanobis distance `d2 = dᵀ Sp⁻¹ d` of the mean
/// difference, `p` characteristics and the lot sizes.
pub fn t2_equivalence_from_distance(
    d2: f64,
    p: usize,
    n1: usize,
    n2: usize,
    epsilon: f64,
    alpha: f64,
) -> Result<T2Equivalence, EquivalenceError> {
    check_alpha(alpha, 1.0)?;
    check_nonneg("squared distance", d2)?;
    if !(epsilon.is_finite() && epsilon > 0.0) {
        return Err(EquivalenceError::BadValue {
            what: "equivalence margin on the distance",
            value: epsilon,
        });
    }
    let n = (n1 + n2) as f64;
    if p == 0 || n1 == 0 || n2 == 0 || n1 + n2 < p + 2 {
        return Err(EquivalenceError::TooFewUnits {
            na: n1,
            nb: n2,
            needed: "n1 + n2 >= p + 2 and at least one unit per lot",
        });
    }
    let scale = n1 as f64 * n2 as f64 / n;
    let df1 = p as f64;
    let df2 = n - df1 - 1.0;
    let t2 = scale * d2;
    let f = df2 / ((n - 2.0) * df1) * t2;
    let lambda = scale * epsilon * epsilon;
    let p_value = ncf_lower_tail(f, df1, df2, lambda);
    let critical_f = ncf_quantile(alpha, df1, df2, lambda);
    let upper_bound = distance_upper_bound(f, df1, df2, n1, n2, alpha).unwrap_or(f64::NAN);
    Ok(T2Equivalence {
        t2,
        f,
        df1,
        df2,
        distance: d2.sqrt(),
        epsilon,
        lambda,
        critical_f,
        p_value,
        upper_bound,
        equivalent: p_value < alpha,
    })
}

/// Half-width of a margin `[lo, hi]` around zero: `min(−lo, hi)` (the smaller side when the
/// margin is asymmetric). Error when the margin does not contain zero in its interior.
pub fn margin_half_width(margin: [f64; 2]) -> Result<f64, EquivalenceError> {
    check_margin(margin)?;
    let [lo, hi] = margin;
    if !(lo < 0.0 && hi > 0.0) {
        return Err(EquivalenceError::MarginExcludesZero { lo, hi });
    }
    Ok((-lo).min(hi))
}

/// A margin on the Mahalanobis distance from per-characteristic margins:
/// `ε² = δᵀ Sp⁻¹ δ`, `δ_k` the half-width of characteristic `k`'s margin
/// ([`margin_half_width`]), through the pooled solve.
///
/// `δ` is the corner of the margin box with every characteristic shifted the same way; with
/// correlated characteristics other corners give other lengths, so this is one convention,
/// not the box itself. Because `Sp` is estimated from the same lots that are tested, ε
/// depends on the data and the T² equivalence test keeps its level only approximately (the
/// error shrinks as the lots grow); for an exact level fix ε in advance.
pub fn epsilon_from_margins(
    pooled: &Pooled,
    margins: &[[f64; 2]],
) -> Result<f64, EquivalenceError> {
    let p = pooled.sd.len();
    if margins.len() != p {
        return Err(EquivalenceError::DimensionMismatch {
            expected: p,
            got: margins.len(),
        });
    }
    let mut delta = DVector::zeros(p);
    for (k, &m) in margins.iter().enumerate() {
        delta[k] = margin_half_width(m)?;
    }
    let z = delta.component_div(&pooled.sd);
    Ok(z.dot(&pooled.solve_corr(&z)).max(0.0).sqrt())
}

/// Power of the T² equivalence test at level `alpha` with `n1`, `n2` units and `p`
/// characteristics when the true Mahalanobis distance is `delta` (< ε for a useful plan):
/// `P(F' ≤ c)` under `F'(p, N − p − 1, n1 n2/N · Δ²)`, `c` the critical value at margin
/// `epsilon` (Wellek 2010).
pub fn t2_equivalence_power(
    p: usize,
    n1: usize,
    n2: usize,
    delta: f64,
    epsilon: f64,
    alpha: f64,
) -> Result<f64, EquivalenceError> {
    check_alpha(alpha, 1.0)?;
    check_nonneg("true distance", delta)?;
    if !(epsilon.is_finite() && epsilon > 0.0) {
        return Err(EquivalenceError::BadValue {
            what: "equivalence margin on the distance",
            value: epsilon,
        });
    }
    if p == 0 || n1 == 0 || n2 == 0 || n1 + n2 < p + 2 {
        return Err(EquivalenceError::TooFewUnits {
            na: n1,
            nb: n2,
            needed: "n1 + n2 >= p + 2 and at least one unit per lot",
        });
    }
    let n = (n1 + n2) as f64;
    let scale = n1 as f64 * n2 as f64 / n;
    let (df1, df2) = (p as f64, n - p as f64 - 1.0);
    let crit = ncf_quantile(alpha, df1, df2, scale * epsilon * epsilon);
    Ok(ncf_lower_tail(crit, df1, df2, scale * delta * delta))
}

/// Smallest equal number of units per lot for which the T² equivalence test reaches power
/// `target` at true distance `delta < epsilon`. `None` when `delta ≥ epsilon`, the target is
/// not in `(0, 1)`, or no lot size up to 10⁸ reaches it.
pub fn t2_equivalence_units_per_lot(
    p: usize,
    delta: f64,
    epsilon: f64,
    alpha: f64,
    target: f64,
) -> Option<usize> {
    if !(delta >= 0.0 && delta < epsilon && target > 0.0 && target < 1.0 && p > 0) {
        return None;
    }
    smallest_n(p / 2 + 2, |n| {
        t2_equivalence_power(p, n, n, delta, epsilon, alpha).is_ok_and(|v| v >= target)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gauss_legendre_is_exact_for_polynomials() {
        // An n-point Gauss–Legendre rule integrates x^k exactly for k ≤ 2n − 1:
        // ∫_{−1}^{1} x^k dx = 2/(k + 1) for even k, 0 for odd k.
        let (nodes, weights) = gauss_legendre(20);
        assert!((weights.iter().sum::<f64>() - 2.0).abs() < 1e-14);
        for k in 0..40 {
            let got: f64 = nodes.iter().zip(&weights).map(|(x, w)| w * x.powi(k)).sum();
            let want = if k % 2 == 0 {
                2.0 / (k as f64 + 1.0)
            } else {
                0.0
            };
            assert!((got - want).abs() < 1e-14, "x^{k}: {got}");
        }
    }

    #[test]
    fn poisson_weights_sum_to_one_and_match_the_direct_form() {
        // Σ_j P(J = j) = 1; for moderate j the deviance form equals −h + j ln h − ln j!.
        for h in [0.3_f64, 7.5, 42.0, 900.0] {
            let top = (h + 40.0 * h.sqrt() + 40.0) as usize;
            let total: f64 = (0..=top).map(|j| ln_poisson(j as f64, h).exp()).sum();
            assert!((total - 1.0).abs() < 1e-13, "h = {h}: {total}");
            for j in [10.0, 25.0, 60.0] {
                let direct = -h + j * f64::ln(h) - ln_gamma(j + 1.0);
                assert!((ln_poisson(j, h) - direct).abs() < 1e-12 * direct.abs().max(1.0));
            }
        }
    }

    #[test]
    fn scaled_numbers_keep_values_beyond_the_double_range() {
        // exp(−1000) · exp(−1000) = exp(−2000), far below the smallest double, and adding a
        // number 2^-1100 times smaller changes nothing.
        let a = Scaled::from_ln(-1000.0);
        assert!((a.times(a).ln() + 2000.0).abs() < 1e-12);
        let b = a.add(Scaled::from_ln(-1000.0 - 1100.0 * std::f64::consts::LN_2));
        assert_eq!(b.ln(), a.ln());
        let c = a.add(a);
        assert!((c.ln() - (-1000.0 + std::f64::consts::LN_2)).abs() < 1e-12);
        assert!(
            (Scaled::from_ln(0.3).mul(2.0).ln() - (0.3 + std::f64::consts::LN_2)).abs() < 1e-15
        );
    }

    #[test]
    fn one_sided_t_tails_add_to_one() {
        for &(t, nu) in &[(0.0, 5.0), (1.3, 12.0), (-2.2, 40.0), (8.0, 3.0)] {
            assert!((t_sf(t, nu) + t_sf(-t, nu) - 1.0).abs() < 1e-15);
        }
        assert_eq!(t_sf(0.0, 7.0), 0.5);
    }
}
