//! Does the shift matter? Specification limits, equivalence margins and capability, beside
//! the T² test: the part of a comparison that turns "the lots differ" into a lot decision.
//!
//! Everything here works from a finished [`Comparison`] (lot sizes, means, covariances and the
//! T² statistic) and a [`Specification`]; the only unit-level input is the count of units
//! outside the limits, taken by [`observe`] from the units as measured.
//!
//! Sign convention: equivalence is about the candidate lot relative to the reference lot, so
//! every difference and margin here is **candidate − reference**, as in the T² section.
//!
//! One job, kept in one file: every step from a specification to the four-way outcome, in the order it runs.

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use super::Comparison;
use crate::stats::capability::{self, QmcSettings, SpecLimits};
use crate::stats::equivalence::{self, SampleStats, VarianceModel};

/// Target power for the units-per-lot estimate of an inconclusive result (common practice).
pub const PLAN_POWER: f64 = 0.8;

/// How a characteristic without a margin in the specification file gets one.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MarginRule {
    /// Only the file's margins.
    #[default]
    FileOnly,
    /// `F × (upper − lower)`: a fraction of the tolerance width (needs both limits).
    ToleranceFraction(f64),
    /// `K ×` the reference lot's standard deviation.
    ReferenceSd(f64),
}

impl MarginRule {
    /// The rule in words, for the text output and the window.
    pub fn describe(&self) -> String {
        match self {
            MarginRule::FileOnly => "margins from the specification file only".into(),
            MarginRule::ToleranceFraction(f) => {
                format!("margin {f} × the tolerance width where the file gives none")
            }
            MarginRule::ReferenceSd(k) => {
                format!("margin {k} × the reference lot's SD where the file gives none")
            }
        }
    }
}

/// Where a characteristic's margin came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MarginFrom {
    /// The specification file.
    File,
    /// The margin rule.
    Rule,
}

/// One compared characteristic's limits and margin (record key
/// `specification.characteristics`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpecEntry {
    /// Characteristic name, as compared.
    pub characteristic: String,
    /// Lower specification limit.
    pub lower: Option<f64>,
    /// Target.
    pub target: Option<f64>,
    /// Upper specification limit.
    pub upper: Option<f64>,
    /// Allowed range of candidate − reference, `[lo, hi]` with `lo < 0 < hi`.
    pub margin: Option<[f64; 2]>,
    /// Where the margin came from.
    #[serde(default)]
    pub margin_from: Option<MarginFrom>,
}

impl SpecEntry {
    /// The limits, for the capability functions (`None` when neither is given).
    pub fn limits(&self) -> Option<SpecLimits> {
        (self.lower.is_some() || self.upper.is_some()).then_some(SpecLimits {
            lower: self.lower,
            upper: self.upper,
        })
    }
}

/// What the quality plan says about the compared characteristics (record key
/// `specification`). One entry per compared characteristic, in column order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Specification {
    /// Specification file name (absent when only a margin rule was given).
    pub file: Option<String>,
    /// SHA-256 of the specification file.
    pub sha256: Option<String>,
    /// Margin rule for characteristics the file gives no margin.
    pub rule: MarginRule,
    /// Margin on the Mahalanobis distance between the lot means, when given.
    #[serde(default)]
    pub distance_margin: Option<f64>,
    /// One entry per compared characteristic.
    pub characteristics: Vec<SpecEntry>,
}

impl Specification {
    /// A specification with no limits and no margins for `characteristics`, to which a rule
    /// or a file's rows are added.
    pub fn empty(characteristics: &[String]) -> Self {
        Specification {
            file: None,
            sha256: None,
            rule: MarginRule::FileOnly,
            distance_margin: None,
            characteristics: characteristics
                .iter()
                .map(|c| SpecEntry {
                    characteristic: c.clone(),
                    lower: None,
                    target: None,
                    upper: None,
                    margin: None,
                    margin_from: None,
                })
                .collect(),
        }
    }

    /// From a specification file lined up with the compared characteristics
    /// ([`crate::data::spec::Spec::align`]).
    pub fn from_file(
        characteristics: &[String],
        spec: &crate::data::spec::Spec,
        aligned: &[Option<crate::data::spec::SpecRow>],
    ) -> Self {
        let mut s = Specification::empty(characteristics);
        s.file = Some(spec.file_name.clone());
        s.sha256 = Some(spec.sha256.clone());
        for (e, row) in s.characteristics.iter_mut().zip(aligned) {
            if let Some(r) = row {
                e.lower = r.lower;
                e.target = r.target;
                e.upper = r.upper;
                e.margin = r.margin;
                e.margin_from = r.margin.map(|_| MarginFrom::File);
            }
        }
        s
    }

    /// The specification as it was given, before the margin rule was applied (what
    /// [`assess`] takes): margins the rule set are removed.
    pub fn as_given(&self) -> Self {
        let mut s = self.clone();
        for e in &mut s.characteristics {
            if e.margin_from != Some(MarginFrom::File) {
                e.margin = None;
                e.margin_from = None;
            }
        }
        s
    }

    /// True when the specification can say anything: a limit, a margin, a rule or a
    /// distance margin.
    pub fn says_anything(&self) -> bool {
        self.rule != MarginRule::FileOnly
            || self.distance_margin.is_some()
            || self
                .characteristics
                .iter()
                .any(|e| e.margin.is_some() || e.limits().is_some())
    }
}

/// Units outside the limits, counted on the units as measured (before any centring).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Observed {
    /// Per characteristic and lot, units strictly outside the limits.
    pub out_of_spec: Vec<[usize; 2]>,
    /// Per lot, units inside every limit.
    pub inside_all: [usize; 2],
    /// Per lot, units counted.
    pub n: [usize; 2],
}

/// Counts units outside the limits in the two lots' unit matrices (`n × p`, columns in the
/// order of the specification's characteristics). A value on a limit is inside.
pub fn observe(spec: &Specification, data: [&DMatrix<f64>; 2]) -> Observed {
    let p = spec.characteristics.len();
    let mut out = Observed {
        out_of_spec: vec![[0; 2]; p],
        inside_all: [0; 2],
        n: [data[0].nrows(), data[1].nrows()],
    };
    for (g, x) in data.iter().enumerate() {
        let mut inside = vec![true; x.nrows()];
        for (k, e) in spec.characteristics.iter().enumerate() {
            if k >= x.ncols() {
                break;
            }
            let (lo, hi) = e
                .limits()
                .map_or((f64::NEG_INFINITY, f64::INFINITY), |l| l.bounds());
            if lo == f64::NEG_INFINITY && hi == f64::INFINITY {
                continue;
            }
            for (i, &v) in x.column(k).iter().enumerate() {
                if v < lo || v > hi {
                    out.out_of_spec[k][g] += 1;
                    inside[i] = false;
                }
            }
        }
        out.inside_all[g] = inside.iter().filter(|&&b| b).count();
    }
    out
}

/// Two one-sided tests of one characteristic (record key `equivalence.per_characteristic`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EquivalenceRow {
    /// Characteristic name.
    pub characteristic: String,
    /// Allowed range of candidate − reference.
    pub margin: [f64; 2],
    /// Candidate − reference mean difference.
    pub difference: f64,
    /// The `1 − 2 alpha` interval of the difference (Welch), the one compared with the margin.
    pub interval: [f64; 2],
    /// TOST p-value with a pooled variance.
    pub pooled_p: f64,
    /// TOST p-value with separate variances (Welch); decides `equivalent`.
    pub welch_p: f64,
    /// Welch's TOST rejects: the difference lies within the margin at level alpha.
    pub equivalent: bool,
    /// The interval lies wholly outside the margin: the difference is shown to exceed it.
    pub beyond: bool,
}

/// The two-sample T² equivalence test (record key `equivalence.multivariate`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MultivariateEquivalence {
    /// Margin ε on the Mahalanobis distance between the lot means.
    pub epsilon: f64,
    /// ε was derived from the per-characteristic margins (the level then holds only
    /// approximately, because ε depends on the pooled covariance of the same data).
    pub epsilon_from_margins: bool,
    /// Observed squared Mahalanobis distance.
    pub d2: f64,
    /// The T² F statistic.
    pub f: f64,
    /// Numerator df.
    pub df1: f64,
    /// Denominator df.
    pub df2: f64,
    /// Noncentrality at the margin, `n1 n2 / N · ε²`.
    pub noncentrality: f64,
    /// Lower alpha point of the noncentral F at the margin: equivalence when `F` is below.
    pub critical_f: f64,
    /// Noncentral F distribution function at `F`.
    pub p_value: f64,
    /// The test rejects: the lot means lie within ε of each other at level alpha.
    pub equivalent: bool,
    /// Upper `1 − alpha` confidence bound of the Mahalanobis distance.
    pub distance_upper_bound: f64,
}

/// Equivalence results (record key `equivalence`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Equivalence {
    /// Level of every equivalence test.
    pub alpha: f64,
    /// TOST per characteristic that has a margin.
    pub per_characteristic: Vec<EquivalenceRow>,
    /// Every characteristic has a margin and every TOST rejects (intersection–union).
    pub all_equivalent: Option<bool>,
    /// The multivariate test, when a distance margin is given or every characteristic has
    /// a margin.
    pub multivariate: Option<MultivariateEquivalence>,
}

/// Capability of one characteristic in one lot (record key `capability[].lots`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CapabilityLot {
    /// Units.
    pub n: usize,
    /// `"Cpk"` with both limits, `"CPU"` or `"CPL"` with one.
    pub index: String,
    /// Cp (both limits only).
    pub cp: Option<f64>,
    /// Its `1 − alpha` chi-square interval.
    pub cp_interval: Option<[f64; 2]>,
    /// Cpk, or CPU / CPL with one limit.
    pub cpk: f64,
    /// Its `1 − alpha` interval (Bissell).
    pub cpk_interval: [f64; 2],
    /// Expected parts per million outside the limits under a normal model.
    pub ppm_expected: f64,
    /// Units observed outside the limits (absent for summary-statistics input).
    pub out_of_spec: Option<usize>,
}

/// Capability of one characteristic in both lots (record key `capability`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CapabilityRow {
    /// Characteristic name.
    pub characteristic: String,
    /// Reference lot, candidate lot.
    pub lots: [CapabilityLot; 2],
}

/// Fraction of units inside every limit at once, one lot.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InSpecLot {
    /// Expected under the lot's fitted multivariate normal (Genz's quasi-Monte Carlo).
    pub expected: f64,
    /// Its error estimate (three standard errors over the random shifts).
    pub error: f64,
    /// Observed fraction of units inside every limit (absent for summary input).
    pub observed: Option<f64>,
}

/// Fraction of units inside every limit (record key `in_spec`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InSpec {
    /// The characteristics with at least one limit (the others are not restricted).
    pub characteristics: Vec<String>,
    /// Reference lot, candidate lot.
    pub lots: [InSpecLot; 2],
}

/// The four-way result of the difference test and the equivalence test (record key
/// `outcome`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// A difference is shown and equivalence within the margins is not.
    DifferBeyondMargins,
    /// A difference is shown, and it lies within the margins.
    DifferWithinMargins,
    /// No difference detected, and equivalence within the margins shown.
    Equivalent,
    /// Neither a difference nor equivalence shown.
    Inconclusive,
}

impl Outcome {
    /// The outcome in words.
    pub fn words(self) -> &'static str {
        match self {
            Outcome::DifferBeyondMargins => "The lots differ, beyond the margins",
            Outcome::DifferWithinMargins => "The lots differ, but within the margins",
            Outcome::Equivalent => "The lots are equivalent: no difference detected",
            Outcome::Inconclusive => "Inconclusive: neither a difference nor equivalence is shown",
        }
    }
}

/// Everything the specification adds to a comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Decision {
    /// The specification, with the margins the rule set.
    pub specification: Specification,
    /// Equivalence tests (absent when no characteristic has a margin and no distance margin
    /// is given).
    pub equivalence: Option<Equivalence>,
    /// Capability of the characteristics with limits.
    pub capability: Vec<CapabilityRow>,
    /// Fraction inside every limit at once.
    pub in_spec: Option<InSpec>,
    /// The four-way outcome (absent without margins).
    pub outcome: Option<Outcome>,
    /// For an inconclusive outcome: units per lot at which the equivalence test would reach
    /// [`PLAN_POWER`] if the true difference were the one observed.
    pub units_needed: Option<usize>,
    /// Notes on what could not be computed, and why.
    pub notes: Vec<String>,
}

/// Why the specification cannot be applied.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DecisionError {
    /// A rule's factor is out of range.
    #[error("{0}")]
    BadRule(String),
    /// The specification's characteristics are not the compared ones.
    #[error("the specification names {got} characteristics but {expected} are compared")]
    Mismatch {
        /// Compared characteristics.
        expected: usize,
        /// In the specification.
        got: usize,
    },
    /// An equivalence or capability computation failed.
    #[error("{characteristic}: {why}")]
    Computation {
        /// Which characteristic (or "all characteristics").
        characteristic: String,
        /// Why.
        why: String,
    },
}

fn fail(characteristic: &str, why: impl std::fmt::Display) -> DecisionError {
    DecisionError::Computation {
        characteristic: characteristic.to_string(),
        why: why.to_string(),
    }
}

/// Checks a rule's factor: a tolerance fraction in `(0, 1]`, an SD multiple above zero.
///
/// # Errors
/// The factor out of range, in words naming the option.
pub fn check_rule(rule: MarginRule) -> Result<(), DecisionError> {
    match rule {
        MarginRule::FileOnly => Ok(()),
        MarginRule::ToleranceFraction(f) if !(f > 0.0 && f <= 1.0) => Err(DecisionError::BadRule(
            format!("--margin-fraction must lie above 0 and at most 1 (got {f})"),
        )),
        MarginRule::ReferenceSd(k) if !(k > 0.0 && k.is_finite()) => Err(DecisionError::BadRule(
            format!("--margin-sd must be a positive number (got {k})"),
        )),
        _ => Ok(()),
    }
}

/// Squared Mahalanobis length `δᵀ S⁻¹ δ` through a Cholesky solve of the correlation form of
/// `S` (no inverse).
fn mahalanobis2(s: &DMatrix<f64>, delta: &DVector<f64>) -> Option<f64> {
    let sd = s.diagonal().map(f64::sqrt);
    let r = DMatrix::from_fn(s.nrows(), s.ncols(), |i, j| s[(i, j)] / (sd[i] * sd[j]));
    let z = delta.component_div(&sd);
    let chol = r.cholesky()?;
    Some(z.dot(&chol.solve(&z)).max(0.0))
}

fn matrix(rows: &[Vec<f64>]) -> DMatrix<f64> {
    let p = rows.len();
    DMatrix::from_fn(p, p, |i, j| rows[i][j])
}

/// Applies the specification to a finished comparison: the margin rule, TOST per
/// characteristic, the multivariate equivalence test, capability, the fraction inside every
/// limit and the four-way outcome.
///
/// # Errors
/// A bad rule factor, a specification of other characteristics, or a failed computation.
pub fn assess(
    c: &Comparison,
    given: &Specification,
    observed: Option<&Observed>,
) -> Result<Decision, DecisionError> {
    check_rule(given.rule)?;
    let p = c.characteristics.len();
    if given.characteristics.len() != p {
        return Err(DecisionError::Mismatch {
            expected: p,
            got: given.characteristics.len(),
        });
    }
    if let Some(e) = given.distance_margin
        && !(e > 0.0 && e.is_finite())
    {
        return Err(DecisionError::BadRule(format!(
            "--equivalence-distance must be a positive number (got {e})"
        )));
    }
    let alpha = c.alpha();
    let mut notes = Vec::new();
    let var = |g: usize, k: usize| c.lots[g].covariance[k][k];
    // The margin rule.
    let mut spec = given.as_given();
    spec.rule = given.rule;
    spec.distance_margin = given.distance_margin;
    let mut no_width = Vec::new();
    for (k, e) in spec.characteristics.iter_mut().enumerate() {
        if e.margin.is_some() {
            continue;
        }
        let m = match given.rule {
            MarginRule::FileOnly => None,
            MarginRule::ToleranceFraction(f) => match (e.lower, e.upper) {
                (Some(l), Some(u)) => Some(f * (u - l)),
                _ => {
                    no_width.push(e.characteristic.clone());
                    None
                }
            },
            MarginRule::ReferenceSd(f) => Some(f * var(0, k).sqrt()),
        };
        if let Some(m) = m {
            e.margin = Some([-m, m]);
            e.margin_from = Some(MarginFrom::Rule);
        }
    }
    if !no_width.is_empty() {
        notes.push(format!(
            "no margin for {}: the tolerance-width rule needs both limits",
            crate::stats::quote_list(&no_width)
        ));
    }
    // TOST per characteristic with a margin.
    let (n1, n2) = (c.lots[0].n, c.lots[1].n);
    let mut rows = Vec::new();
    for (k, e) in spec.characteristics.iter().enumerate() {
        let Some(margin) = e.margin else { continue };
        // Candidate − reference, the cancellation-free difference of the T² section.
        let d = c.per_characteristic[k].difference;
        let reference = SampleStats {
            n: n1,
            mean: 0.0,
            variance: var(0, k),
        };
        let candidate = SampleStats {
            n: n2,
            mean: d,
            variance: var(1, k),
        };
        let run = |model| {
            equivalence::tost(candidate, reference, margin, alpha, model)
                .map_err(|why| fail(&e.characteristic, why))
        };
        let pooled = run(VarianceModel::Pooled)?;
        let welch = run(VarianceModel::Welch)?;
        let [lo, hi] = margin;
        rows.push(EquivalenceRow {
            characteristic: e.characteristic.clone(),
            margin,
            difference: d,
            interval: welch.interval,
            pooled_p: pooled.p_value,
            welch_p: welch.p_value,
            equivalent: welch.equivalent,
            beyond: welch.interval[0] > hi || welch.interval[1] < lo,
        });
    }
    let every_margin = spec.characteristics.iter().all(|e| e.margin.is_some());
    let all_equivalent =
        (every_margin && !rows.is_empty()).then(|| rows.iter().all(|r| r.equivalent));
    // The multivariate test.
    let sp = matrix(&c.pooled_covariance);
    let epsilon = match given.distance_margin {
        Some(e) => Some((e, false)),
        None if every_margin => {
            let mut delta = DVector::zeros(p);
            for (k, e) in spec.characteristics.iter().enumerate() {
                let m = e.margin.unwrap_or([f64::NAN; 2]);
                delta[k] = equivalence::margin_half_width(m)
                    .map_err(|why| fail(&e.characteristic, why))?;
            }
            let e2 = mahalanobis2(&sp, &delta)
                .ok_or_else(|| fail("all characteristics", "the pooled covariance is singular"))?;
            Some((e2.sqrt(), true))
        }
        None => None,
    };
    let multivariate = match epsilon {
        Some((eps, from_margins)) => {
            let t = equivalence::t2_equivalence_from_distance(
                c.hotelling.mahalanobis_d2,
                p,
                n1,
                n2,
                eps,
                alpha,
            )
            .map_err(|why| fail("all characteristics", why))?;
            Some(MultivariateEquivalence {
                epsilon: eps,
                epsilon_from_margins: from_margins,
                d2: c.hotelling.mahalanobis_d2,
                f: t.f,
                df1: t.df1,
                df2: t.df2,
                noncentrality: t.lambda,
                critical_f: t.critical_f,
                p_value: t.p_value,
                equivalent: t.equivalent,
                distance_upper_bound: t.upper_bound,
            })
        }
        None => None,
    };
    if !rows.is_empty() && !every_margin && given.distance_margin.is_none() {
        let missing: Vec<String> = spec
            .characteristics
            .iter()
            .filter(|e| e.margin.is_none())
            .map(|e| e.characteristic.clone())
            .collect();
        notes.push(format!(
            "no margin for {}: equivalence is shown only for the characteristics with one, \
             and the multivariate test needs a margin for every characteristic or \
             --equivalence-distance",
            crate::stats::quote_list(&missing)
        ));
    }
    let equivalence = (!rows.is_empty() || multivariate.is_some()).then_some(Equivalence {
        alpha,
        per_characteristic: rows,
        all_equivalent,
        multivariate,
    });
    // Capability.
    let mut capability_rows = Vec::new();
    for (k, e) in spec.characteristics.iter().enumerate() {
        let Some(limits) = e.limits() else { continue };
        let lot = |g: usize| -> Result<CapabilityLot, DecisionError> {
            let cap = capability::capability(
                c.lots[g].n,
                c.lots[g].mean[k],
                var(g, k).sqrt(),
                limits,
                alpha,
            )
            .map_err(|why| fail(&e.characteristic, why))?;
            let (index, est) = match (cap.cpk, cap.cpu, cap.cpl) {
                (Some(v), _, _) => ("Cpk", v),
                (None, Some(v), _) => ("CPU", v),
                (None, None, Some(v)) => ("CPL", v),
                _ => return Err(fail(&e.characteristic, "no capability index")),
            };
            Ok(CapabilityLot {
                n: cap.n,
                index: index.into(),
                cp: cap.cp.map(|v| v.value),
                cp_interval: cap.cp.map(|v| [v.lower, v.upper]),
                cpk: est.value,
                cpk_interval: [est.lower, est.upper],
                ppm_expected: cap.expected_ppm,
                out_of_spec: observed.map(|o| o.out_of_spec[k][g]),
            })
        };
        capability_rows.push(CapabilityRow {
            characteristic: e.characteristic.clone(),
            lots: [lot(0)?, lot(1)?],
        });
    }
    // Fraction inside every limit at once, over the characteristics with limits.
    let limited: Vec<usize> = (0..p)
        .filter(|&k| spec.characteristics[k].limits().is_some())
        .collect();
    let in_spec = if limited.is_empty() {
        None
    } else {
        let q = limited.len();
        let lot = |g: usize| -> Result<InSpecLot, DecisionError> {
            let mean = DVector::from_fn(q, |i, _| c.lots[g].mean[limited[i]]);
            let cov = DMatrix::from_fn(q, q, |i, j| c.lots[g].covariance[limited[i]][limited[j]]);
            let (lower, upper): (Vec<f64>, Vec<f64>) = limited
                .iter()
                .map(|&k| {
                    spec.characteristics[k]
                        .limits()
                        .map_or((f64::NEG_INFINITY, f64::INFINITY), |l| l.bounds())
                })
                .unzip();
            let f =
                capability::fraction_inside(&mean, &cov, &lower, &upper, QmcSettings::default())
                    .map_err(|why| fail("all characteristics", why))?;
            Ok(InSpecLot {
                expected: f.probability,
                error: f.error,
                observed: observed
                    .filter(|o| o.n[g] > 0)
                    .map(|o| o.inside_all[g] as f64 / o.n[g] as f64),
            })
        };
        Some(InSpec {
            characteristics: limited
                .iter()
                .map(|&k| c.characteristics[k].clone())
                .collect(),
            lots: [lot(0)?, lot(1)?],
        })
    };
    // The four-way outcome.
    let shown_equivalent = equivalence.as_ref().map(|eq| {
        let univariate = eq.per_characteristic.iter().all(|r| r.equivalent);
        let multi = eq.multivariate.as_ref().is_none_or(|m| m.equivalent);
        univariate && multi
    });
    let differ = c.hotelling.differ;
    let outcome = shown_equivalent.map(|eq| match (differ, eq) {
        (true, false) => Outcome::DifferBeyondMargins,
        (true, true) => Outcome::DifferWithinMargins,
        (false, true) => Outcome::Equivalent,
        (false, false) => Outcome::Inconclusive,
    });
    let units_needed = match (outcome, &equivalence) {
        (Some(Outcome::Inconclusive), Some(eq)) => units_needed(c, eq, &spec, alpha),
        _ => None,
    };
    Ok(Decision {
        specification: spec,
        equivalence,
        capability: capability_rows,
        in_spec,
        outcome,
        units_needed,
        notes,
    })
}

/// Units per lot at which every equivalence test of the result would reach [`PLAN_POWER`]
/// if the true differences were the observed ones (`None` when an observed difference lies
/// on or beyond its margin: no lot size shows equivalence then).
fn units_needed(
    c: &Comparison,
    eq: &Equivalence,
    spec: &Specification,
    alpha: f64,
) -> Option<usize> {
    let mut need = 0usize;
    for r in &eq.per_characteristic {
        let k = spec
            .characteristics
            .iter()
            .position(|e| e.characteristic == r.characteristic)?;
        let sigma = c.per_characteristic[k].pooled_sd;
        need = need.max(equivalence::tost_units_per_lot(
            r.difference,
            sigma,
            r.margin,
            alpha,
            PLAN_POWER,
        )?);
    }
    if let Some(m) = &eq.multivariate {
        need = need.max(equivalence::t2_equivalence_units_per_lot(
            c.characteristics.len(),
            m.d2.sqrt(),
            m.epsilon,
            alpha,
            PLAN_POWER,
        )?);
    }
    Some(need)
}

/// The decision in words: the outcome first, then the characteristics that fail their
/// margin and each lot's expected fraction out of specification.
pub fn decision_text(d: &Decision, names: [&str; 2]) -> String {
    let Some(outcome) = d.outcome else {
        let mut s = String::from(
            "Equivalence is not assessed: it needs margins (a specification file with margins, \
             --margin-fraction, --margin-sd or --equivalence-distance).",
        );
        in_spec_words(&mut s, d, names);
        return s;
    };
    let mut s = format!("{}.", outcome.words());
    if let Some(eq) = &d.equivalence {
        let failing: Vec<String> = eq
            .per_characteristic
            .iter()
            .filter(|r| !r.equivalent)
            .map(|r| r.characteristic.clone())
            .collect();
        let beyond: Vec<String> = eq
            .per_characteristic
            .iter()
            .filter(|r| r.beyond)
            .map(|r| r.characteristic.clone())
            .collect();
        if !failing.is_empty() {
            s.push_str(&format!(
                " Not shown within the margin: {}",
                crate::stats::quote_list(&failing)
            ));
            if beyond.is_empty() {
                s.push_str(" (no interval lies wholly outside its margin).");
            } else {
                s.push_str(&format!(
                    "; wholly outside it: {}.",
                    crate::stats::quote_list(&beyond)
                ));
            }
        } else if !eq.per_characteristic.is_empty() {
            s.push_str(" Every characteristic with a margin lies within it.");
        }
        if let Some(m) = &eq.multivariate {
            s.push_str(&format!(
                " Multivariate: the distance between the lot means is at most {} (upper {}% \
                 bound) against the margin {}{}.",
                crate::format::format_sig(m.distance_upper_bound, 4),
                crate::format::format_confidence(eq.alpha),
                crate::format::format_sig(m.epsilon, 4),
                if m.epsilon_from_margins {
                    ", derived from the margins and the data, so the level is approximate"
                } else {
                    ""
                }
            ));
        }
    }
    if outcome == Outcome::Inconclusive {
        match d.units_needed {
            Some(n) => s.push_str(&format!(
                " About {n} units per lot would give the equivalence tests {:.0}% power if the \
                 true difference were the one observed.",
                100.0 * PLAN_POWER
            )),
            None => s.push_str(
                " No lot size would show equivalence if the true difference were the one \
                 observed: it lies on or beyond a margin.",
            ),
        }
    }
    in_spec_words(&mut s, d, names);
    s
}

fn in_spec_words(s: &mut String, d: &Decision, names: [&str; 2]) {
    if let Some(ins) = &d.in_spec {
        let part = |g: usize| {
            let l = &ins.lots[g];
            format!(
                "{} {} ppm",
                names[g],
                crate::format::format_sig(1e6 * (1.0 - l.expected).max(0.0), 3)
            )
        };
        s.push_str(&format!(
            " Expected out of specification (normal model): {}, {}.",
            part(0),
            part(1)
        ));
    }
}
