//! Settings, the inputs and the result types of a comparison (serializable; the record's
//! own types in `report::sections` are converted from these).

#[allow(unused_imports)]
use super::*;

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
    /// Sequential stopping of the permutation draws (`None`: all are drawn). On by default
    /// for a new run; a missing field (settings written before sequential stopping, as in an
    /// old record) reads as `None`, so such a run recomputes exactly as it was made.
    #[serde(default)]
    pub sequential: Option<Sequential>,
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
            sequential: Some(Sequential::default()),
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
    /// Mean difference, candidate − reference.
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
    /// Mean difference, candidate − reference.
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
    /// Everything the comparison was computed with.
    pub settings: Settings,
    /// Characteristic names, in column order.
    pub characteristics: Vec<String>,
    /// Units of measure.
    pub units: Vec<Option<String>>,
    /// The two lots: first is the reference, second the candidate; every difference is
    /// candidate − reference (second minus first).
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

impl Comparison {
    /// Significance level used (the settings hold it once).
    pub fn alpha(&self) -> f64 {
        self.settings.alpha
    }

    /// The same comparison with every direction-dependent number written the other way round,
    /// reference − candidate, as records of schema `lotshift.comparison/1` held them: the mean
    /// differences and their intervals, the t statistics, the discriminant direction, its
    /// scores and cut-off, and the detectable shift per characteristic. `verify` recomputes a
    /// `/1` summary through this. Negation is exact in floating point, so every number equals
    /// what the earlier release computed; the equivalence section was already candidate −
    /// reference and is unchanged.
    pub fn reference_minus_candidate(&self) -> Comparison {
        let mut c = self.clone();
        let mirror = |iv: [f64; 2]| [-iv[1], -iv[0]];
        for iv in &mut c.intervals {
            iv.difference = -iv.difference;
            iv.simultaneous = mirror(iv.simultaneous);
            iv.bonferroni = mirror(iv.bonferroni);
            iv.one_at_a_time = mirror(iv.one_at_a_time);
        }
        for r in &mut c.per_characteristic {
            r.difference = -r.difference;
            r.standardized_difference = -r.standardized_difference;
            r.pooled_t = -r.pooled_t;
            r.welch_t = -r.welch_t;
        }
        let d = &mut c.discriminant;
        for v in d
            .coefficients
            .iter_mut()
            .chain(d.standardized.iter_mut())
            .chain(d.structure.iter_mut())
        {
            *v = -*v;
        }
        d.cutoff = -d.cutoff;
        if let Some(scores) = &mut d.scores {
            for v in scores.iter_mut().flatten() {
                *v = -*v;
            }
            d.score_histogram = ScoreHistogram::new(scores);
        }
        for r in &mut c.ranking {
            r.standardized_coefficient = -r.standardized_coefficient;
        }
        if let Some(det) = &mut c.detectable {
            for v in &mut det.per_characteristic_sd {
                *v = -*v;
            }
        }
        c
    }
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

impl Detectable {
    /// The detectable shift along the observed direction, per characteristic, in words:
    /// "hub length 0.30 SD, mass −0.41 SD".
    pub fn along_words(&self, characteristics: &[String]) -> String {
        characteristics
            .iter()
            .zip(&self.per_characteristic_sd)
            .map(|(n, v)| format!("{n} {} SD", crate::format::format_sig(*v, 2)))
            .collect::<Vec<_>>()
            .join(", ")
    }
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
