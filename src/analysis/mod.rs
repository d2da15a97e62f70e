//! Settings → [`Comparison`]: the one place the statistics are put together. Every number
//! the window, the command line and the record show comes from a `Comparison`.

use nalgebra::{DMatrix, DVector, Matrix2};
use serde::{Deserialize, Serialize};

use crate::stats::bignormal::{LargeLotNormality, large_lot_normality};
use crate::stats::checks::{self, BoxM, Mardia, Outlier, UnequalCovariance};
use crate::stats::hotelling::{self, CONDITION_WARN, Pooled};
use crate::stats::moments::{ColumnSummary, LotMoments, column_summary};
use crate::stats::normality::{MAX_UNITS, ShapiroWilk, shapiro_wilk};
use crate::stats::permutation::{PermutationResult, permutation_test};
use crate::stats::{EngineError, discriminant, ellipse, quote_list};

pub mod decision;

pub use crate::format::{format_confidence, format_p, format_sig, p_text};

use decision::{Decision, DecisionError, Observed, Specification};

/// What to compute and at which level.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Settings {
    /// Significance level of the test and `1 −` the confidence of every interval.
    pub alpha: f64,
    /// Compute the leave-one-out misclassification rate (needs unit data).
    pub leave_one_out: bool,
    /// Run the assumption checks (Box's M, Mardia, Shapiro–Wilk, outliers, unequal covariance).
    pub checks: bool,
    /// Relabellings for the permutation p-value (0: skip it).
    pub permutations: usize,
    /// Seed of the permutation draws.
    pub seed: u64,
}

/// Default number of relabellings of the permutation test.
pub const DEFAULT_PERMUTATIONS: usize = 9999;
/// Default seed of the permutation test.
pub const DEFAULT_SEED: u64 = 20_261_202;

impl Default for Settings {
    fn default() -> Self {
        Settings {
            alpha: 0.05,
            leave_one_out: true,
            checks: true,
            permutations: DEFAULT_PERMUTATIONS,
            seed: DEFAULT_SEED,
        }
    }
}

/// Shapiro–Wilk results of one characteristic in both lots (record key `normality`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NormalityRow {
    /// Characteristic name.
    pub characteristic: String,
    /// Result per lot (absent with fewer than 3 units or no spread).
    pub lots: [Option<ShapiroWilk>; 2],
    /// For lots above Shapiro–Wilk's range (more than 5,000 units): Anderson–Darling and K²
    /// with the skewness and excess kurtosis.
    #[serde(default)]
    pub large: [Option<LargeLotNormality>; 2],
}

/// Units far from their own lot's mean (record key `outliers`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutlierReport {
    /// Cutoff on d² per lot (Beta reference at alpha / n).
    pub cutoff: [f64; 2],
    /// Flagged units, largest distance first per lot.
    pub units: Vec<Outlier>,
}

/// The tests the assumption checks choose between (written into the record as the strings
/// shown by `Display`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum FavouredTest {
    /// Hotelling's pooled two-sample T².
    #[serde(rename = "pooled T²")]
    PooledT2,
    /// The Krishnamoorthy–Yu test, which does not assume equal covariance matrices.
    #[serde(rename = "unequal-covariance test")]
    UnequalCovariance,
    /// The permutation p-value of T².
    #[serde(rename = "permutation p-value")]
    Permutation,
}

impl FavouredTest {
    /// The test's name in words (the record's string).
    pub fn name(self) -> &'static str {
        match self {
            FavouredTest::PooledT2 => "pooled T²",
            FavouredTest::UnequalCovariance => "unequal-covariance test",
            FavouredTest::Permutation => "permutation p-value",
        }
    }
}

impl std::fmt::Display for FavouredTest {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// Which test the assumption checks favour, and why (record key `favoured`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Favoured {
    /// The favoured test.
    pub test: FavouredTest,
    /// The reason, in plain words.
    pub why: String,
    /// That test's p-value.
    pub p_value: f64,
}

/// Progress and cancellation for a long run; the worker thread's handle implements it.
pub trait Progress: Sync {
    /// The run reached `fraction` (0 to 1) of `stage`.
    fn report(&self, stage: &str, fraction: f64);
    /// True when the run should stop as soon as it can.
    fn cancelled(&self) -> bool;
}

/// A progress hook that ignores reports and never cancels.
pub struct Silent;

impl Progress for Silent {
    fn report(&self, _stage: &str, _fraction: f64) {}
    fn cancelled(&self) -> bool {
        false
    }
}

/// One lot's unit data for [`compare`].
#[derive(Debug, Clone, Copy)]
pub struct LotData<'a> {
    /// Display name of the lot.
    pub name: &'a str,
    /// `n × p` unit data, one row per unit, columns in the order of the characteristics.
    pub data: &'a DMatrix<f64>,
}

/// One lot's published summary statistics for [`compare_summaries`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SummaryLot {
    /// Display name of the lot.
    pub name: String,
    /// Number of units.
    pub n: usize,
    /// Mean vector.
    pub mean: Vec<f64>,
    /// Unbiased covariance matrix (divisor `n − 1`), row by row.
    pub covariance: Vec<Vec<f64>>,
}

/// Hotelling's two-sample test (record key `hotelling`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HotellingResult {
    /// Hotelling's T².
    pub t2: f64,
    /// F form of T².
    pub f: f64,
    /// Numerator df, `p`.
    pub df1: f64,
    /// Denominator df, `n1 + n2 − p − 1`.
    pub df2: f64,
    /// `P(F > f)`.
    pub p_value: f64,
    /// Critical T² at alpha.
    pub critical_t2: f64,
    /// Critical F at alpha.
    pub critical_f: f64,
    /// Mahalanobis distance squared between the lot means, on the pooled covariance.
    pub mahalanobis_d2: f64,
    /// `p_value < alpha`.
    pub differ: bool,
}

/// Follow-up intervals for one characteristic (record key `intervals`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    /// Characteristic name.
    pub characteristic: String,
    /// Mean difference, first lot minus second.
    pub difference: f64,
    /// Standard error of the difference on the pooled variance.
    pub standard_error: f64,
    /// T²-based simultaneous interval.
    pub simultaneous: [f64; 2],
    /// Bonferroni interval.
    pub bonferroni: [f64; 2],
    /// One-at-a-time t interval.
    pub one_at_a_time: [f64; 2],
    /// Whether each of the three excludes zero, in the order above.
    pub excludes_zero: [bool; 3],
}

/// Fisher's discriminant direction (record key `discriminant`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Discriminant {
    /// Raw coefficients `a = Sp⁻¹ d`.
    pub coefficients: Vec<f64>,
    /// Standardized coefficients `a_k · sqrt(Sp_kk)`.
    pub standardized: Vec<f64>,
    /// Pooled within-lot correlation of each characteristic with the discriminant score.
    pub structure: Vec<f64>,
    /// Allocation cut-off `aᵀ(x̄1 + x̄2)/2` on the raw score `aᵀx`.
    pub cutoff: f64,
    /// Units misclassified when each is allocated by the rule fitted to all units
    /// `[of lot 1, of lot 2]`; absent for summary-only input.
    pub apparent_misclassified: Option<[usize; 2]>,
    /// Same, with each unit held out of the fit (Lachenbruch's holdout).
    pub leave_one_out_misclassified: Option<[usize; 2]>,
    /// Leave-one-out misclassification rate over all units.
    pub leave_one_out_rate: Option<f64>,
    /// Histogram of the scores on common bins (for charts; absent for summary input).
    pub score_histogram: Option<ScoreHistogram>,
    /// Each unit's score `aᵀ(x − midpoint)`, per lot (not written to the record).
    #[serde(skip)]
    pub scores: Option<[Vec<f64>; 2]>,
}

/// Most bins of a score histogram (Rice's rule, 2·n^(1/3), chooses fewer for small lots).
pub const MAX_SCORE_BINS: usize = 60;

/// Both lots' discriminant scores counted on common bins.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScoreHistogram {
    /// Left edge of the first bin.
    pub start: f64,
    /// Bin width.
    pub width: f64,
    /// Units per bin, per lot.
    pub counts: [Vec<usize>; 2],
}

impl ScoreHistogram {
    /// Counts scores on `2·n^(1/3)` common bins (8 to [`MAX_SCORE_BINS`]); `None` when all
    /// scores are equal.
    pub fn new(scores: &[Vec<f64>; 2]) -> Option<Self> {
        let (lo, hi) = scores
            .iter()
            .flatten()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                (a.min(v), b.max(v))
            });
        if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
            return None;
        }
        let n = scores.iter().map(Vec::len).sum::<usize>() as f64;
        let bins = ((2.0 * n.cbrt()).ceil() as usize).clamp(8, MAX_SCORE_BINS);
        let width = (hi - lo) / bins as f64;
        let mut counts = [vec![0; bins], vec![0; bins]];
        for (g, s) in scores.iter().enumerate() {
            for &v in s {
                let b = (((v - lo) / width) as usize).min(bins - 1);
                counts[g][b] += 1;
            }
        }
        Some(ScoreHistogram {
            start: lo,
            width,
            counts,
        })
    }

    /// Density of bin `b` in lot `g` (count / (n · width)).
    pub fn density(&self, g: usize, b: usize) -> f64 {
        let n: usize = self.counts[g].iter().sum();
        if n == 0 {
            0.0
        } else {
            self.counts[g][b] as f64 / (n as f64 * self.width)
        }
    }
}

/// How much one characteristic drives the shift (record key `ranking`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Contribution {
    /// Characteristic name.
    pub characteristic: String,
    /// Drop in T² when this characteristic is left out (its unique contribution).
    pub t2_drop: f64,
    /// Standardized discriminant coefficient.
    pub standardized_coefficient: f64,
}

/// Per-characteristic summaries and univariate tests (record key `per_characteristic`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CharacteristicResult {
    /// Characteristic name.
    pub characteristic: String,
    /// Unit of measure, when the header gave one.
    pub unit: Option<String>,
    /// Summary in each lot (absent for summary-only input except n, mean and sd).
    pub lots: [ColumnSummary; 2],
    /// Mean difference, first lot minus second.
    pub difference: f64,
    /// Pooled standard deviation.
    pub pooled_sd: f64,
    /// Difference divided by the pooled standard deviation.
    pub standardized_difference: f64,
    /// Pooled-variance t statistic.
    pub pooled_t: f64,
    /// Its df.
    pub pooled_df: f64,
    /// Its two-sided p-value.
    pub pooled_p: f64,
    /// Welch's t statistic.
    pub welch_t: f64,
    /// Welch–Satterthwaite df.
    pub welch_df: f64,
    /// Its two-sided p-value.
    pub welch_p: f64,
}

/// One lot's statistics in the comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LotResult {
    /// Display name.
    pub name: String,
    /// Units used.
    pub n: usize,
    /// Mean vector.
    pub mean: Vec<f64>,
    /// Unbiased covariance matrix, row by row.
    pub covariance: Vec<Vec<f64>>,
}

/// Everything the tool reports about two lots.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Significance level used.
    pub alpha: f64,
    /// Everything the comparison was computed with.
    pub settings: Settings,
    /// Characteristic names, in column order.
    pub characteristics: Vec<String>,
    /// Units of measure.
    pub units: Vec<Option<String>>,
    /// The two lots: first is the reference, the difference is first minus second.
    pub lots: [LotResult; 2],
    /// Pooled covariance matrix, row by row.
    pub pooled_covariance: Vec<Vec<f64>>,
    /// Condition number of the pooled correlation matrix.
    pub condition_number: f64,
    /// Hotelling's two-sample test.
    pub hotelling: HotellingResult,
    /// Follow-up intervals, one per characteristic.
    pub intervals: Vec<Interval>,
    /// Discriminant direction.
    pub discriminant: Discriminant,
    /// Characteristics ordered by how much each drives the shift (largest T² drop first).
    pub ranking: Vec<Contribution>,
    /// Summaries and univariate tests, one per characteristic.
    pub per_characteristic: Vec<CharacteristicResult>,
    /// Box's M test of equal covariance matrices.
    pub box_m: Option<BoxM>,
    /// Mardia's tests per lot.
    pub mardia: Vec<Mardia>,
    /// Shapiro–Wilk per characteristic and lot.
    pub normality: Vec<NormalityRow>,
    /// Outlier screening.
    pub outliers: Option<OutlierReport>,
    /// Test that does not assume equal covariance matrices.
    pub unequal_covariance: Option<UnequalCovariance>,
    /// Permutation p-value.
    pub permutation: Option<PermutationResult>,
    /// Which test the checks favour.
    pub favoured: Favoured,
    /// The result in plain words.
    pub verdict: String,
    /// Cautions about this result (conditioning, small lots...).
    pub warnings: Vec<String>,
    /// Specification limits, equivalence margins and capability, when a specification or a
    /// margin rule was given.
    #[serde(default)]
    pub decision: Option<Decision>,
    /// Numeric columns the lots did not line up on (not the ones left out by choice), as
    /// `"header" (lot N: why)`; named in the verdict's first sentence.
    #[serde(default)]
    pub not_compared: Vec<String>,
    /// Sentences about the inputs that must be read before the result (the same file given
    /// for both lots); they open the verdict.
    #[serde(default)]
    pub input_alerts: Vec<String>,
    /// The shift these lot sizes detect with [`DETECTABLE_POWER`] (absent when no shift
    /// reaches it, as with too few units).
    #[serde(default)]
    pub detectable: Option<Detectable>,
    /// The T² test without the units flagged as outliers (absent when none is flagged).
    #[serde(default)]
    pub without_outliers: Option<WithoutOutliers>,
}

/// The T² test rerun without the units the outlier screen flags: does the decision hold?
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WithoutOutliers {
    /// Units left out per lot.
    pub removed: [usize; 2],
    /// T² without them.
    pub t2: f64,
    /// Its p-value.
    pub p_value: f64,
    /// The lots differ at alpha without them.
    pub differ: bool,
    /// The decision (differ or not) is the same with and without them.
    pub same_decision: bool,
}

/// Power at which the detectable shift is stated (common practice for planning).
pub const DETECTABLE_POWER: f64 = 0.8;

/// The smallest shift the T² test detects with [`DETECTABLE_POWER`] at these lot sizes
/// (normal lots, equal covariance matrices), so that "no difference detected" can be read
/// against what could have been seen.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Detectable {
    /// Power the shift is detected with.
    pub power: f64,
    /// Mahalanobis distance of that shift.
    pub distance: f64,
    /// The same shift along the observed direction of the difference, in each
    /// characteristic's pooled SD (the distance times the structure correlation).
    pub per_characteristic_sd: Vec<f64>,
}

/// Mahalanobis distance the level-`alpha` T² test detects with power `target` (bisection on
/// the noncentral F power, which grows with the distance).
pub fn detectable_distance(p: usize, n1: usize, n2: usize, alpha: f64, target: f64) -> Option<f64> {
    use crate::stats::power::power;
    let reaches = |d: f64| power(p, n1, n2, d * d, alpha) >= target;
    if power(p, n1, n2, 0.0, alpha).is_nan() {
        return None;
    }
    let mut hi = 1.0;
    while !reaches(hi) {
        hi *= 2.0;
        if hi > 1e6 {
            return None;
        }
    }
    let mut lo = 0.0;
    while hi - lo > 1e-9 * hi {
        let mid = 0.5 * (lo + hi);
        if reaches(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}

/// Box's M is judged at this level (common practice: M is very sensitive to non-normality).
pub const BOX_M_LEVEL: f64 = 0.001;
/// Mardia's tests are judged at this fixed level when choosing the test to read (common
/// practice), whatever alpha the comparison uses.
pub const MARDIA_LEVEL: f64 = 0.05;
/// In lots above 5,000 units a Mardia rejection counts only when the departure is material:
/// skewness `b1,p` at least this (a rule of thumb; common practice, no source)...
pub const MATERIAL_SKEWNESS: f64 = 0.5;
/// ...or kurtosis `b2,p` off its normal value `p(p + 2)` by at least this fraction.
pub const MATERIAL_KURTOSIS: f64 = 0.1;
/// Lot sizes differing by more than this ratio count as unbalanced (common practice).
pub const UNBALANCED_RATIO: f64 = 1.2;

/// The assumption checks that could not be computed for these lots, each with the reason
/// (empty when the checks were switched off: that is said on its own).
pub fn checks_not_computed(c: &Comparison) -> Vec<String> {
    if !c.settings.checks {
        return Vec::new();
    }
    let p = c.characteristics.len();
    let mut out = Vec::new();
    if c.box_m.is_none() {
        out.push(format!(
            "Box's M needs more units than characteristics in each lot ({} and {} units for \
             {p} characteristics)",
            c.lots[0].n, c.lots[1].n
        ));
    }
    let unit_data = c.discriminant.scores.is_some();
    if !unit_data {
        out.push("Mardia's tests, Shapiro–Wilk and the outlier screen need unit data".into());
        return out;
    }
    for lot in &c.lots {
        if !c.mardia.iter().any(|m| m.lot == lot.name) {
            out.push(format!(
                "Mardia's tests for \"{}\" need a non-singular covariance ({} units for {p} \
                 characteristics)",
                lot.name, lot.n
            ));
        }
    }
    let mut no_sw: Vec<String> = Vec::new();
    for row in &c.normality {
        for (g, r) in row.lots.iter().enumerate() {
            if r.is_none() {
                no_sw.push(format!(
                    "\"{}\" in \"{}\"",
                    row.characteristic, c.lots[g].name
                ));
            }
        }
    }
    if !no_sw.is_empty() {
        out.push(format!(
            "Shapiro–Wilk needs at least 3 units with some spread: not computed for {}",
            no_sw.join(", ")
        ));
    }
    out
}

/// Decides which test the assumption checks favour.
pub fn favour(c: &Comparison) -> Favoured {
    let (n1, n2) = (c.lots[0].n as f64, c.lots[1].n as f64);
    let unbalanced = n1.max(n2) / n1.min(n2) > UNBALANCED_RATIO;
    let box_p = c.box_m.as_ref().map(BoxM::preferred_p_value);
    let cov_differ = box_p.is_some_and(|p| p < BOX_M_LEVEL);
    let pooled = c.hotelling.p_value;
    if cov_differ
        && unbalanced
        && let Some(u) = &c.unequal_covariance
    {
        return Favoured {
            test: FavouredTest::UnequalCovariance,
            why: format!(
                "Box's M gives {} (below {BOX_M_LEVEL}, the level common practice uses \
                 because M is sensitive to non-normality) and the lots differ in size ({} and \
                 {} units): the pooled T² can then be far off its level, while the \
                 Krishnamoorthy–Yu test does not assume equal covariance matrices",
                p_text(box_p.unwrap_or(f64::NAN)),
                c.lots[0].n,
                c.lots[1].n
            ),
            p_value: u.p_value,
        };
    }
    let nonnormal: Vec<&str> = c
        .mardia
        .iter()
        .filter(|m| {
            let rejects = m.skewness_p < MARDIA_LEVEL || m.kurtosis_p < MARDIA_LEVEL;
            // Above Shapiro–Wilk's range every test rejects departures too small to matter:
            // there the departure must also be material (MATERIAL_SKEWNESS, MATERIAL_KURTOSIS).
            let n = c.lots.iter().find(|l| l.name == m.lot).map_or(0, |l| l.n);
            let p = c.characteristics.len() as f64;
            let material = m.skewness >= MATERIAL_SKEWNESS
                || (m.kurtosis / (p * (p + 2.0)) - 1.0).abs() >= MATERIAL_KURTOSIS;
            rejects && (n <= MAX_UNITS || material)
        })
        .map(|m| m.lot.as_str())
        .collect();
    if cov_differ {
        return Favoured {
            test: FavouredTest::PooledT2,
            why: format!(
                "Box's M gives {} (covariance matrices differ), but the lots are of similar \
                 size, where the pooled T² keeps its level (common practice); the \
                 unequal-covariance test is shown for comparison",
                p_text(box_p.unwrap_or(f64::NAN))
            ),
            p_value: pooled,
        };
    }
    if !nonnormal.is_empty()
        && let Some(perm) = &c.permutation
    {
        return Favoured {
            test: FavouredTest::Permutation,
            why: format!(
                "Mardia's tests reject multivariate normality at {MARDIA_LEVEL} in {}; the \
                 permutation p-value does not rely on it",
                nonnormal
                    .iter()
                    .map(|l| format!("\"{l}\""))
                    .collect::<Vec<_>>()
                    .join(" and ")
            ),
            p_value: perm.p_value,
        };
    }
    let skipped = checks_not_computed(c);
    let why = if !c.settings.checks {
        "the assumption checks were not run".to_string()
    } else if skipped.is_empty() {
        "no check contradicts its assumptions (equal covariance matrices, multivariate \
         normal lots)"
            .to_string()
    } else {
        format!(
            "no check that could be computed contradicts its assumptions, but not every check \
             could be: {}",
            skipped.join("; ")
        )
    };
    Favoured {
        test: FavouredTest::PooledT2,
        why,
        p_value: pooled,
    }
}

fn rows_of(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| m.row(i).iter().copied().collect())
        .collect()
}

fn check_common(names: &[String], p1: usize, p2: usize, alpha: f64) -> Result<(), EngineError> {
    if !(alpha > 0.0 && alpha < 1.0) {
        return Err(EngineError::BadAlpha(alpha));
    }
    if p1 != p2 {
        return Err(EngineError::DimensionMismatch(p1, p2));
    }
    if p1 == 0 || names.len() != p1 {
        return Err(EngineError::NoCharacteristics);
    }
    Ok(())
}

fn validate(
    characteristics: &[String],
    shapes: [(usize, usize); 2],
    names: [&str; 2],
    alpha: f64,
) -> Result<(), EngineError> {
    let p = shapes[0].1;
    check_common(characteristics, p, shapes[1].1, alpha)?;
    for (shape, name) in shapes.iter().zip(names) {
        if shape.0 == 0 {
            return Err(EngineError::EmptyLot(name.to_string()));
        }
    }
    // Checked before any cross-product: with thousands of characteristics and a few units the
    // p × p matrices alone would be large.
    let (n1, n2) = (shapes[0].0, shapes[1].0);
    if n1 + n2 < p + 2 {
        return Err(EngineError::TooFewUnits { n1, n2, p });
    }
    Ok(())
}

/// Unit data for [`compare_units`]: borrowed (the engine works on centred copies; the
/// window's path, which keeps the lots) or owned (centred in place, so memory holds one copy;
/// the command line's path for big lots). Both give the same numbers to the last bit: the
/// arithmetic is the same, only where the centred values are stored differs.
pub enum Units<'a> {
    /// `n × p` matrices of the two lots, left untouched.
    Borrowed([&'a DMatrix<f64>; 2]),
    /// `n × p` matrices the engine may consume.
    Owned([DMatrix<f64>; 2]),
}

impl Units<'_> {
    fn matrix(&self, g: usize) -> &DMatrix<f64> {
        match self {
            Units::Borrowed(d) => d[g],
            Units::Owned(d) => &d[g],
        }
    }
}

/// Per characteristic and lot: min, median and max of the values as measured (taken before
/// any centring), with mean and SD still to come from the moments.
fn order_statistics(data: [&DMatrix<f64>; 2]) -> Vec<[ColumnSummary; 2]> {
    (0..data[0].ncols())
        .map(|k| [0, 1].map(|g| column_summary(data[g].column(k).as_slice(), f64::NAN, f64::NAN)))
        .collect()
}

/// Completes the summaries with the mean and SD of the lots' moments: one rule for every kind
/// of unit input.
fn complete_summaries(summaries: &mut [[ColumnSummary; 2]], m: [&LotMoments; 2]) {
    for (k, pair) in summaries.iter_mut().enumerate() {
        for (sum, m) in pair.iter_mut().zip(m) {
            let again = column_summary(&[], m.origin[k] + m.offset[k], m.ssp[(k, k)]);
            sum.mean = again.mean;
            sum.sd = if m.n > 1 {
                (m.ssp[(k, k)] / (m.n - 1) as f64).sqrt()
            } else {
                f64::NAN
            };
        }
    }
}

/// Compares two lots from their unit data: the one entry point for unit input.
///
/// # Errors
/// Too few units for the number of characteristics, a constant characteristic, collinear
/// characteristics, mismatched shapes, a bad alpha, or cancellation.
pub fn compare_units(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    data: Units<'_>,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    validate(
        characteristics,
        [data.matrix(0).shape(), data.matrix(1).shape()],
        names,
        settings.alpha,
    )?;
    progress.report("moments", 0.0);
    // Common origin: the first unit of the first lot.
    let origin: DVector<f64> = data.matrix(0).row(0).transpose();
    let mut summaries = order_statistics([data.matrix(0), data.matrix(1)]);
    let ([m1, m2], centred) = match data {
        Units::Borrowed(d) => {
            let (m1, c1) = LotMoments::from_data_centred(d[0], &origin);
            let (m2, c2) = LotMoments::from_data_centred(d[1], &origin);
            ([m1, m2], [c1, c2])
        }
        Units::Owned([mut x, mut y]) => {
            let m1 = LotMoments::centre_in_place(&mut x, &origin);
            let m2 = LotMoments::centre_in_place(&mut y, &origin);
            ([m1, m2], [x, y])
        }
    };
    if progress.cancelled() {
        return Err(EngineError::Cancelled);
    }
    complete_summaries(&mut summaries, [&m1, &m2]);
    compare_centred(
        characteristics,
        units,
        names,
        [m1, m2],
        centred,
        summaries,
        settings,
        progress,
    )
}

/// Compares two lots from borrowed unit data ([`compare_units`] with [`Units::Borrowed`]).
///
/// # Errors
/// As [`compare_units`].
pub fn compare(
    characteristics: &[String],
    units: &[Option<String>],
    lots: [LotData<'_>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    compare_units(
        characteristics,
        units,
        [lots[0].name, lots[1].name],
        Units::Borrowed([lots[0].data, lots[1].data]),
        settings,
        progress,
    )
}

/// Compares two lots from unit data it consumes ([`compare_units`] with [`Units::Owned`]).
///
/// # Errors
/// As [`compare_units`].
pub fn compare_owned(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    data: [DMatrix<f64>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    compare_units(
        characteristics,
        units,
        names,
        Units::Owned(data),
        settings,
        progress,
    )
}

#[allow(clippy::too_many_arguments)]
fn compare_centred(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    moments: [LotMoments; 2],
    centred: [DMatrix<f64>; 2],
    summaries: Vec<[ColumnSummary; 2]>,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Comparison, EngineError> {
    let [m1, m2] = moments;
    let [c1, c2] = centred;
    progress.report("test", 0.2);
    let mut out = finish(
        characteristics,
        units,
        names,
        &m1,
        &m2,
        Some(summaries),
        settings,
    )?;
    // Unit-level results: scores, apparent and holdout errors.
    let pooled = Pooled::new(&m1, &m2, characteristics)?;
    let a = DVector::from_vec(out.discriminant.coefficients.clone());
    let d = &m1.offset - &m2.offset;
    let half = &d * 0.5;
    let s1 = discriminant::scores(&c1, &a, &half);
    let s2 = discriminant::scores(&c2, &a, &(-&half));
    let apparent = [
        s1.iter().filter(|&&s| s < 0.0).count(),
        s2.iter().filter(|&&s| s >= 0.0).count(),
    ];
    out.discriminant.apparent_misclassified = Some(apparent);
    let scores = [s1, s2];
    out.discriminant.score_histogram = ScoreHistogram::new(&scores);
    out.discriminant.scores = Some(scores);
    if settings.leave_one_out {
        progress.report("leave-one-out", 0.3);
        let loo = discriminant::leave_one_out([&c1, &c2], &d, &pooled, |f| {
            progress.report("leave-one-out", 0.3 + 0.2 * f);
            !progress.cancelled()
        });
        if progress.cancelled() {
            return Err(EngineError::Cancelled);
        }
        if let Some(wrong) = loo {
            out.discriminant.leave_one_out_misclassified = Some(wrong);
            out.discriminant.leave_one_out_rate =
                Some((wrong[0] + wrong[1]) as f64 / (m1.n + m2.n) as f64);
        }
    }
    permute_centred(&mut out, [&c1, &c2], &d, settings, progress)?;
    if settings.checks {
        progress.report("assumption checks", 0.9);
        // The centred units are whitened in place: no further copy of them.
        unit_checks(&mut out, [c1, c2], settings.alpha, [&m1, &m2]);
        if progress.cancelled() {
            return Err(EngineError::Cancelled);
        }
    }
    conclude(&mut out);
    progress.report("done", 1.0);
    Ok(out)
}

fn permute_centred(
    out: &mut Comparison,
    centred: [&DMatrix<f64>; 2],
    d: &DVector<f64>,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<(), EngineError> {
    if settings.permutations == 0 {
        return Ok(());
    }
    progress.report("permutations", 0.5);
    let keep_going = |f: f64| {
        progress.report("permutations", 0.5 + 0.4 * f);
        !progress.cancelled()
    };
    out.permutation = permutation_test(
        centred,
        d,
        settings.permutations,
        settings.seed,
        &keep_going,
    );
    if progress.cancelled() {
        return Err(EngineError::Cancelled);
    }
    out.settings.permutations = settings.permutations;
    out.settings.seed = settings.seed;
    Ok(())
}

/// Adds the permutation p-value (when `settings.permutations > 0`) to a comparison of the
/// same unit data, and updates the favoured test and the verdict. Split out so the window can
/// show a result first and the permutation p-value when it is ready; it centres the units
/// exactly as [`compare`] does, so the p-value is the same.
///
/// # Errors
/// Cancellation.
pub fn add_permutation(
    out: &mut Comparison,
    data: [&DMatrix<f64>; 2],
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<(), EngineError> {
    if settings.permutations == 0 || data[0].nrows() == 0 {
        return Ok(());
    }
    let origin: DVector<f64> = data[0].row(0).transpose();
    let (m1, c1) = LotMoments::from_data_centred(data[0], &origin);
    let (m2, c2) = LotMoments::from_data_centred(data[1], &origin);
    let d = &m1.offset - &m2.offset;
    permute_centred(out, [&c1, &c2], &d, settings, progress)?;
    conclude(out);
    Ok(())
}

/// Mardia's tests, Shapiro–Wilk and the outlier screen: the checks that need unit data; with
/// outliers flagged, the T² test again without them.
fn unit_checks(
    out: &mut Comparison,
    centred: [DMatrix<f64>; 2],
    alpha: f64,
    moments: [&LotMoments; 2],
) {
    let p = out.characteristics.len();
    let mut cutoff = [f64::NAN; 2];
    let mut flagged = Vec::new();
    // Shapiro–Wilk is location-invariant: the centred columns serve (and it runs first,
    // before the whitening below changes them).
    out.normality = (0..p)
        .map(|k| NormalityRow {
            characteristic: out.characteristics[k].clone(),
            lots: [
                shapiro_wilk(centred[0].column(k).as_slice()),
                shapiro_wilk(centred[1].column(k).as_slice()),
            ],
            large: [0, 1].map(|g| {
                let col = centred[g].column(k);
                (col.len() > MAX_UNITS)
                    .then(|| large_lot_normality(col.as_slice()))
                    .flatten()
            }),
        })
        .collect();
    // The flagged units' centred values, turned back from their whitened rows.
    let mut removed: [Vec<DVector<f64>>; 2] = [Vec::new(), Vec::new()];
    for (g, mut c) in centred.into_iter().enumerate() {
        if let Some(w) = checks::whiten_keeping(&mut c) {
            out.mardia.push(checks::mardia(&out.lots[g].name, &c));
            let (cut, units) = checks::outliers(g, &c, alpha);
            cutoff[g] = cut;
            for u in &units {
                let z: Vec<f64> = c.row(u.unit).iter().copied().collect();
                removed[g].push(w.unwhiten(&z));
            }
            flagged.extend(units);
        }
    }
    out.outliers = Some(OutlierReport {
        cutoff,
        units: flagged,
    });
    out.without_outliers = without(out, moments, &removed, alpha);
}

/// The T² test once more without the flagged units, from the lots' moments with those units
/// taken out (`n' = n − k`; the kept units' centred mean `μ' = −Σ cᵢ / n'`, so the offset
/// becomes `offset + μ'` and `SSP' = SSP − Σ cᵢcᵢᵀ − n' μ'μ'ᵀ`): no second pass over the data.
fn without(
    out: &Comparison,
    moments: [&LotMoments; 2],
    removed: &[Vec<DVector<f64>>; 2],
    alpha: f64,
) -> Option<WithoutOutliers> {
    if removed.iter().all(Vec::is_empty) {
        return None;
    }
    let mut kept = Vec::with_capacity(2);
    for (m, r) in moments.iter().zip(removed) {
        let n = m.n.checked_sub(r.len())?;
        if n < 2 {
            return None;
        }
        let mut sum = DVector::zeros(m.dim());
        let mut ssp = m.ssp.clone();
        for c in r {
            sum += c;
            ssp -= c * c.transpose();
        }
        let mu = -sum / n as f64;
        ssp -= (&mu * mu.transpose()) * n as f64;
        kept.push(LotMoments {
            n,
            origin: m.origin.clone(),
            offset: &m.offset + &mu,
            ssp,
            spread_scale: m.spread_scale.clone(),
        });
    }
    let pooled = Pooled::new(&kept[0], &kept[1], &out.characteristics).ok()?;
    let test = hotelling::two_sample(&kept[0], &kept[1], &pooled, alpha);
    let differ = test.p_value < alpha;
    Some(WithoutOutliers {
        removed: [removed[0].len(), removed[1].len()],
        t2: test.t2,
        p_value: test.p_value,
        differ,
        same_decision: differ == out.hotelling.differ,
    })
}

/// Compares two lots from published summary statistics only (n, mean vector, covariance).
///
/// # Errors
/// As [`compare`], plus malformed matrices.
pub fn compare_summaries(
    characteristics: &[String],
    units: &[Option<String>],
    lots: [&SummaryLot; 2],
    settings: &Settings,
) -> Result<Comparison, EngineError> {
    let p = lots[0].mean.len();
    check_common(characteristics, p, lots[1].mean.len(), settings.alpha)?;
    let mut moments = Vec::with_capacity(2);
    let origin = DVector::from_vec(lots[0].mean.clone());
    for lot in &lots {
        if lot.covariance.len() != p || lot.covariance.iter().any(|r| r.len() != p) {
            return Err(EngineError::DimensionMismatch(p, lot.covariance.len()));
        }
        if lot.n == 0 {
            return Err(EngineError::EmptyLot(lot.name.clone()));
        }
        let cov = DMatrix::from_fn(p, p, |i, j| {
            0.5 * (lot.covariance[i][j] + lot.covariance[j][i])
        });
        let mean = DVector::from_vec(lot.mean.clone());
        moments.push(LotMoments::from_summary(lot.n, &mean, &cov, &origin));
    }
    let summaries: Vec<[ColumnSummary; 2]> = (0..p)
        .map(|k| {
            let one = |m: &LotMoments, lot: &SummaryLot| ColumnSummary {
                n: m.n,
                mean: lot.mean[k],
                sd: lot.covariance[k][k].sqrt(),
                min: f64::NAN,
                median: f64::NAN,
                max: f64::NAN,
            };
            [one(&moments[0], lots[0]), one(&moments[1], lots[1])]
        })
        .collect();
    finish(
        characteristics,
        units,
        [&lots[0].name, &lots[1].name],
        &moments[0],
        &moments[1],
        Some(summaries),
        settings,
    )
}

fn finish(
    characteristics: &[String],
    units: &[Option<String>],
    names: [&str; 2],
    m1: &LotMoments,
    m2: &LotMoments,
    summaries: Option<Vec<[ColumnSummary; 2]>>,
    settings: &Settings,
) -> Result<Comparison, EngineError> {
    let p = m1.dim();
    let alpha = settings.alpha;
    let pooled = Pooled::new(m1, m2, characteristics)?;
    let test = hotelling::two_sample(m1, m2, &pooled, alpha);
    let sets = hotelling::intervals(m1, m2, &pooled, &test, alpha);
    let excludes = |iv: [f64; 2]| iv[0] > 0.0 || iv[1] < 0.0;
    let intervals: Vec<Interval> = sets
        .iter()
        .enumerate()
        .map(|(k, s)| Interval {
            characteristic: characteristics[k].clone(),
            difference: test.difference[k],
            standard_error: s.standard_error,
            simultaneous: s.simultaneous,
            bonferroni: s.bonferroni,
            one_at_a_time: s.one_at_a_time,
            excludes_zero: [
                excludes(s.simultaneous),
                excludes(s.bonferroni),
                excludes(s.one_at_a_time),
            ],
        })
        .collect();
    let summaries = summaries.unwrap_or_default();
    let per_characteristic: Vec<CharacteristicResult> = (0..p)
        .map(|k| {
            let u = hotelling::univariate(m1, m2, &pooled, k);
            CharacteristicResult {
                characteristic: characteristics[k].clone(),
                unit: units.get(k).cloned().flatten(),
                lots: summaries[k],
                difference: test.difference[k],
                pooled_sd: pooled.sd[k],
                standardized_difference: test.difference[k] / pooled.sd[k],
                pooled_t: u.pooled_t,
                pooled_df: u.pooled_df,
                pooled_p: u.pooled_p,
                welch_t: u.welch_t,
                welch_df: u.welch_df,
                welch_p: u.welch_p,
            }
        })
        .collect();
    let mut ranking: Vec<Contribution> = (0..p)
        .map(|k| Contribution {
            characteristic: characteristics[k].clone(),
            t2_drop: test.t2_drop[k],
            standardized_coefficient: test.standardized[k],
        })
        .collect();
    ranking.sort_by(|a, b| b.t2_drop.total_cmp(&a.t2_drop));
    let mean_total = |m: &LotMoments| -> f64 {
        let mean = m.mean();
        test.coefficients.dot(&mean)
    };
    let cutoff = 0.5 * (mean_total(m1) + mean_total(m2));
    let differ = test.p_value < alpha;
    let hot = HotellingResult {
        t2: test.t2,
        f: test.f,
        df1: test.df1,
        df2: test.df2,
        p_value: test.p_value,
        critical_t2: test.critical_t2,
        critical_f: test.critical_f,
        mahalanobis_d2: test.mahalanobis_d2,
        differ,
    };
    let mut warnings = Vec::new();
    if pooled.condition > CONDITION_WARN {
        let involved: Vec<String> = pooled
            .weakest
            .iter()
            .map(|&k| characteristics[k].clone())
            .collect();
        warnings.push(format!(
            "the pooled covariance is ill-conditioned (condition number {:.2e}, about {:.0} of \
             16 significant digits lost): {} are nearly collinear; consider leaving one out",
            pooled.condition,
            pooled.condition.log10(),
            quote_list(&involved)
        ));
    }
    let (box_m, unequal_covariance) = if settings.checks {
        (checks::box_m(m1, m2), checks::unequal_covariance(m1, m2))
    } else {
        (None, None)
    };
    let mut out = Comparison {
        alpha,
        settings: settings.clone(),
        characteristics: characteristics.to_vec(),
        units: units.to_vec(),
        lots: [
            LotResult {
                name: names[0].to_string(),
                n: m1.n,
                mean: m1.mean().iter().copied().collect(),
                covariance: rows_of(&m1.covariance()),
            },
            LotResult {
                name: names[1].to_string(),
                n: m2.n,
                mean: m2.mean().iter().copied().collect(),
                covariance: rows_of(&m2.covariance()),
            },
        ],
        pooled_covariance: rows_of(&pooled.covariance),
        condition_number: pooled.condition,
        hotelling: hot,
        intervals,
        discriminant: Discriminant {
            coefficients: test.coefficients.iter().copied().collect(),
            standardized: test.standardized.iter().copied().collect(),
            structure: test.structure.iter().copied().collect(),
            cutoff,
            apparent_misclassified: None,
            leave_one_out_misclassified: None,
            leave_one_out_rate: None,
            score_histogram: None,
            scores: None,
        },
        ranking,
        per_characteristic,
        box_m,
        mardia: Vec::new(),
        normality: Vec::new(),
        outliers: None,
        unequal_covariance,
        permutation: None,
        favoured: Favoured {
            test: FavouredTest::PooledT2,
            why: String::new(),
            p_value: f64::NAN,
        },
        verdict: String::new(),
        warnings,
        decision: None,
        not_compared: Vec::new(),
        input_alerts: Vec::new(),
        without_outliers: None,
        detectable: detectable_distance(p, m1.n, m2.n, alpha, DETECTABLE_POWER).map(|d| {
            Detectable {
                power: DETECTABLE_POWER,
                distance: d,
                per_characteristic_sd: test.structure.iter().map(|s| d * s).collect(),
            }
        }),
    };
    conclude(&mut out);
    Ok(out)
}

/// Sets the favoured test and the verdict from everything computed so far. With a
/// specification, the four-way outcome comes first; without one the verdict is the T² result
/// alone (so records written before specifications existed still verify word for word).
fn conclude(c: &mut Comparison) {
    c.favoured = favour(c);
    let t2 = verdict_text(c);
    let verdict = match &c.decision {
        Some(d) => format!(
            "{} {t2}",
            decision::decision_text(d, [&c.lots[0].name, &c.lots[1].name])
        ),
        None => t2,
    };
    let mut opening: Vec<String> = c.input_alerts.clone();
    if !c.not_compared.is_empty() {
        let n = c.not_compared.len();
        opening.push(format!(
            "{n} numeric {} not compared: {}.",
            if n == 1 { "column was" } else { "columns were" },
            c.not_compared.join(", ")
        ));
    }
    opening.push(verdict);
    c.verdict = opening.join(" ");
}

/// What screening the inputs found, for [`note_inputs`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct InputNotes {
    /// Numeric columns the lots did not line up on (a dropped column can change the result).
    pub not_compared: Vec<String>,
    /// Sentences that open the verdict (the same file for both lots).
    pub alerts: Vec<String>,
    /// Warnings shown with the result (repeated serial numbers, code-like columns).
    pub warnings: Vec<String>,
}

/// Adds what screening the inputs found: the verdict opens with the alerts and the columns
/// not compared; the warnings join the result's warnings.
pub fn note_inputs(c: &mut Comparison, notes: InputNotes) {
    c.not_compared = notes.not_compared;
    c.input_alerts = notes.alerts;
    c.warnings.extend(notes.warnings);
    conclude(c);
}

/// Applies a specification (limits, margins, margin rule) to a finished comparison: the
/// equivalence tests, capability, the fraction inside the limits and the four-way outcome
/// (see [`decision::assess`]); the verdict is rewritten to lead with the outcome.
/// `observed` holds the counts of units outside the limits ([`decision::observe`], taken on
/// the units as measured), absent for summary-statistics input.
///
/// # Errors
/// As [`decision::assess`].
pub fn apply_specification(
    c: &mut Comparison,
    given: &Specification,
    observed: Option<&Observed>,
) -> Result<(), DecisionError> {
    c.decision = Some(decision::assess(c, given, observed)?);
    conclude(c);
    Ok(())
}

/// "T² = …, F(df1, df2) = …, p = …" with `sig` significant digits.
pub fn test_statistics(h: &HotellingResult, sig: usize) -> String {
    format!(
        "T² = {}, F({}, {}) = {}, {}",
        format_sig(h.t2, sig),
        h.df1,
        h.df2,
        format_sig(h.f, sig),
        p_text(h.p_value)
    )
}

fn verdict_text(c: &Comparison) -> String {
    let h = &c.hotelling;
    let alpha = c.alpha;
    let stats = test_statistics(h, 4);
    let mut s = if h.differ {
        let leaders: Vec<String> = c
            .ranking
            .iter()
            .take(2)
            .filter(|r| r.t2_drop > 0.0)
            .map(|r| r.characteristic.clone())
            .collect();
        let flagged: Vec<String> = c
            .intervals
            .iter()
            .filter(|i| i.excludes_zero[0])
            .map(|i| i.characteristic.clone())
            .collect();
        let mut s = format!(
            "The lots differ at alpha {alpha}: {stats}. The shift is driven most by {}.",
            quote_list(&leaders)
        );
        if flagged.is_empty() {
            s.push_str(
                " No single characteristic's simultaneous interval excludes zero: the shift \
                 lies in a combination of characteristics.",
            );
        } else {
            s.push_str(&format!(
                " Simultaneous intervals exclude zero for {}.",
                quote_list(&flagged)
            ));
        }
        s
    } else {
        format!(
            "No difference between the lot means detected at alpha {alpha}: {stats}. This is \
             not proof that the lots are the same; see the intervals for the size of \
             difference the data can rule out."
        )
    };
    if let Some(w) = &c.without_outliers {
        let k = w.removed[0] + w.removed[1];
        s.push_str(&format!(
            " Without the {k} unit{} flagged as outliers, T² = {}, {}: the decision {}.",
            if k == 1 { "" } else { "s" },
            format_sig(w.t2, 4),
            p_text(w.p_value),
            if w.same_decision {
                "holds"
            } else {
                "changes; look at those units before deciding"
            }
        ));
    }
    let f = &c.favoured;
    if f.test != FavouredTest::PooledT2 && f.p_value.is_finite() {
        let differ = f.p_value < alpha;
        let detail = match (f.test, &c.unequal_covariance) {
            (FavouredTest::UnequalCovariance, Some(u)) => format!(
                "F({}, {}) = {}, {}",
                u.df1,
                format_sig(u.df2, 4),
                format_sig(u.f, 4),
                p_text(u.p_value)
            ),
            _ => p_text(f.p_value),
        };
        s.push_str(&format!(
            " The assumption checks favour the {} ({detail}): by it the lots {} at alpha {alpha}.",
            f.test,
            if differ {
                "differ"
            } else {
                "do not differ detectably"
            }
        ));
        if differ != h.differ {
            s = format!(
                "The tests disagree at alpha {alpha}: the pooled T² says the lots {}, the {} \
                 says they {}; read the checks before deciding. {s}",
                if h.differ {
                    "differ"
                } else {
                    "do not differ detectably"
                },
                f.test,
                if differ {
                    "differ"
                } else {
                    "do not differ detectably"
                }
            );
        }
    }
    s
}

/// Geometry for the pairwise view of characteristics `i` and `j`.
#[derive(Debug, Clone, PartialEq)]
pub struct PairGeometry {
    /// Each lot's mean confidence ellipse for this pair alone.
    pub mean_regions: [Option<Vec<[f64; 2]>>; 2],
    /// Each lot's normal-theory data ellipse at the chosen coverage.
    pub data_ellipses: [Option<Vec<[f64; 2]>>; 2],
    /// Mean-difference ellipse as the shadow of the p-dimensional T² region.
    pub difference_shadow: Option<Vec<[f64; 2]>>,
    /// Mean-difference ellipse for this pair alone.
    pub difference_pair: Option<Vec<[f64; 2]>>,
    /// The two lot means.
    pub means: [[f64; 2]; 2],
    /// The mean difference (first minus second).
    pub difference: [f64; 2],
}

/// Ellipses for characteristics `i` and `j` from a finished comparison.
pub fn pair_geometry(c: &Comparison, i: usize, j: usize, coverage: f64) -> PairGeometry {
    let sub = |m: &Vec<Vec<f64>>| Matrix2::new(m[i][i], m[i][j], m[j][i], m[j][j]);
    let alpha = c.alpha;
    let segments = 120;
    let means = [
        [c.lots[0].mean[i], c.lots[0].mean[j]],
        [c.lots[1].mean[i], c.lots[1].mean[j]],
    ];
    let per_lot =
        |k: usize, r2: f64| ellipse::outline(means[k], sub(&c.lots[k].covariance), r2, segments);
    let n1 = c.lots[0].n;
    let n2 = c.lots[1].n;
    let scale = 1.0 / n1 as f64 + 1.0 / n2 as f64;
    let sp = sub(&c.pooled_covariance) * scale;
    let difference = [c.intervals[i].difference, c.intervals[j].difference];
    let p = c.characteristics.len();
    PairGeometry {
        mean_regions: [
            per_lot(0, ellipse::mean_region_r2(n1, alpha)),
            per_lot(1, ellipse::mean_region_r2(n2, alpha)),
        ],
        data_ellipses: [
            per_lot(0, ellipse::data_r2(coverage)),
            per_lot(1, ellipse::data_r2(coverage)),
        ],
        difference_shadow: ellipse::outline(
            difference,
            sp,
            ellipse::difference_r2(n1, n2, p, alpha),
            segments,
        ),
        difference_pair: ellipse::outline(
            difference,
            sp,
            ellipse::difference_r2(n1, n2, 2, alpha),
            segments,
        ),
        means,
        difference,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lots() -> [DMatrix<f64>; 2] {
        let a = [
            [10.2, 20.1, 5.0],
            [9.8, 19.7, 5.3],
            [10.5, 20.6, 4.8],
            [10.1, 20.0, 5.1],
            [9.6, 19.9, 5.6],
            [10.3, 20.4, 4.9],
            [10.0, 20.2, 5.2],
        ];
        let b = [
            [10.6, 20.2, 5.1],
            [10.9, 20.8, 4.7],
            [10.4, 19.9, 5.5],
            [11.0, 20.5, 5.0],
            [10.7, 20.6, 5.2],
            [10.5, 20.3, 4.6],
        ];
        [
            DMatrix::from_fn(a.len(), 3, |i, k| a[i][k]),
            DMatrix::from_fn(b.len(), 3, |i, k| b[i][k]),
        ]
    }

    fn names() -> Vec<String> {
        ["x", "y", "z"].map(String::from).to_vec()
    }

    fn quick() -> Settings {
        Settings {
            permutations: 0,
            ..Settings::default()
        }
    }

    /// Borrowed and owned units give the same comparison to the last bit.
    #[test]
    fn borrowed_and_owned_units_agree_exactly() {
        let [a, b] = lots();
        let units = vec![None; 3];
        let borrowed = compare_units(
            &names(),
            &units,
            ["a", "b"],
            Units::Borrowed([&a, &b]),
            &quick(),
            &Silent,
        )
        .unwrap();
        let owned = compare_units(
            &names(),
            &units,
            ["a", "b"],
            Units::Owned([a.clone(), b.clone()]),
            &quick(),
            &Silent,
        )
        .unwrap();
        assert_eq!(
            serde_json::to_string(&borrowed).unwrap(),
            serde_json::to_string(&owned).unwrap()
        );
    }

    /// The lots' own means and covariances, given as summary statistics, give the same test
    /// as the units (the T² statistic depends on the data only through them).
    #[test]
    fn summaries_of_the_units_give_the_same_test() {
        let [a, b] = lots();
        let units = vec![None; 3];
        let c = compare_units(
            &names(),
            &units,
            ["a", "b"],
            Units::Borrowed([&a, &b]),
            &quick(),
            &Silent,
        )
        .unwrap();
        let summary = |g: usize| SummaryLot {
            name: c.lots[g].name.clone(),
            n: c.lots[g].n,
            mean: c.lots[g].mean.clone(),
            covariance: c.lots[g].covariance.clone(),
        };
        let s = compare_summaries(&names(), &units, [&summary(0), &summary(1)], &quick()).unwrap();
        let rel = |x: f64, y: f64| (x - y).abs() / x.abs().max(1e-300);
        assert!(rel(s.hotelling.t2, c.hotelling.t2) < 1e-10);
        assert!(rel(s.hotelling.p_value, c.hotelling.p_value) < 1e-9);
        for (i, j) in s.intervals.iter().zip(&c.intervals) {
            assert!(
                rel(
                    i.simultaneous[1] - i.simultaneous[0],
                    j.simultaneous[1] - j.simultaneous[0]
                ) < 1e-10
            );
        }
    }

    /// A bad alpha and a lot too small for the characteristics are errors, not results.
    #[test]
    fn invalid_inputs_are_errors() {
        let [a, b] = lots();
        let units = vec![None; 3];
        let bad = Settings {
            alpha: 1.5,
            ..quick()
        };
        assert!(matches!(
            compare_units(
                &names(),
                &units,
                ["a", "b"],
                Units::Borrowed([&a, &b]),
                &bad,
                &Silent
            ),
            Err(EngineError::BadAlpha(_))
        ));
        let tiny = [a.rows(0, 1).into_owned(), b.rows(0, 2).into_owned()];
        assert!(matches!(
            compare_units(
                &names(),
                &units,
                ["a", "b"],
                Units::Borrowed([&tiny[0], &tiny[1]]),
                &quick(),
                &Silent
            ),
            Err(EngineError::TooFewUnits { .. })
        ));
    }
}
