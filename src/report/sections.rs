//! The sections of the comparison record, defined here and nowhere else: their field names
//! are the record's keys (schema `lotshift.comparison/2`, README "The comparison record"), in
//! the order they are written. The engine's types (`analysis`, `stats`, `data`) are converted
//! into these with `From`, and back for the engine functions that read a comparison; every
//! conversion names every field, so a field added to or renamed in an engine type does not
//! compile until the record's side is decided here. A record key is never renamed, only added.
//!
//! Numbers that do not exist (a median from summary statistics, a p-value of a degenerate
//! test) are written as `null`, as serde_json writes NaN; read back, `null` is NaN again.

use serde::{Deserialize, Serialize};

use crate::analysis::decision::{
    CapabilityLot, CapabilityRow, Equivalence, EquivalenceRow, InSpec, InSpecLot, MarginFrom,
    MarginRule, MultivariateEquivalence, Outcome, SpecEntry, Specification,
};
use crate::analysis::{
    CharacteristicResult, Contribution, Discriminant, Favoured, FavouredTest, HotellingResult,
    Interval, NormalityRow, ScoreHistogram, Settings,
};
use crate::data::Unmatched;
use crate::data::exclusions::Exclusion;
use crate::stats::bignormal::LargeLotNormality;
use crate::stats::checks::{BoxM, Mardia, UnequalCovariance};
use crate::stats::moments::ColumnSummary;
use crate::stats::normality::ShapiroWilk;
use crate::stats::permutation::{PermutationResult, Sequential, StoppedBy};

/// Reading numbers that may be `null` (written for NaN and infinities) as NaN.
pub(crate) mod nan {
    use serde::{Deserialize, Deserializer};

    /// A number, or numbers, where `null` stands for NaN.
    pub trait Nullable: Sized {
        /// Reads `Self`, with `null` as NaN.
        ///
        /// # Errors
        /// Anything but numbers or `null` in the expected shape.
        fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Self, D::Error>;
    }

    fn value(v: Option<f64>) -> f64 {
        v.unwrap_or(f64::NAN)
    }

    impl Nullable for f64 {
        fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            Option::<f64>::deserialize(d).map(value)
        }
    }

    impl Nullable for [f64; 2] {
        fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            <[Option<f64>; 2]>::deserialize(d).map(|v| v.map(value))
        }
    }

    impl Nullable for Option<[f64; 2]> {
        fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            Option::<[Option<f64>; 2]>::deserialize(d).map(|v| v.map(|v| v.map(value)))
        }
    }

    impl Nullable for Vec<f64> {
        fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            Vec::<Option<f64>>::deserialize(d).map(|v| v.into_iter().map(value).collect())
        }
    }

    impl Nullable for Vec<Vec<f64>> {
        fn read<'de, D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
            Vec::<Vec<Option<f64>>>::deserialize(d).map(|m| {
                m.into_iter()
                    .map(|row| row.into_iter().map(value).collect())
                    .collect()
            })
        }
    }

    /// `#[serde(deserialize_with = "nan::de")]`.
    ///
    /// # Errors
    /// As [`Nullable::read`].
    pub fn de<'de, D: Deserializer<'de>, T: Nullable>(d: D) -> Result<T, D::Error> {
        T::read(d)
    }
}

/// `settings`: everything the comparison was computed with. Absent keys take the engine's
/// defaults.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SettingsRecord {
    /// Significance level.
    #[serde(deserialize_with = "nan::de")]
    pub alpha: f64,
    /// The leave-one-out misclassification rate was computed.
    pub leave_one_out: bool,
    /// The assumption checks were run.
    pub checks: bool,
    /// Relabellings of the permutation test (0: skipped).
    pub permutations: usize,
    /// Seed of the relabellings.
    pub seed: u64,
    /// Sequential stopping of the relabellings (`null`: all drawn). Absent in a record made
    /// before sequential stopping, which reads as `null` and so recomputes as it was made.
    #[serde(default)]
    pub sequential: Option<SequentialRecord>,
}

/// `settings.sequential`: when the relabellings stop early.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SequentialRecord {
    /// Besag & Clifford's h: stop at the h-th relabelling reaching the observed T² (0: off).
    pub hits: usize,
    /// Gandy's resampling risk of the decision at alpha (0: his boundaries are off).
    pub risk: f64,
}

impl From<&Sequential> for SequentialRecord {
    fn from(s: &Sequential) -> Self {
        let Sequential { hits, risk } = *s;
        SequentialRecord { hits, risk }
    }
}

impl From<&SequentialRecord> for Sequential {
    fn from(s: &SequentialRecord) -> Self {
        Sequential {
            hits: s.hits,
            risk: s.risk,
        }
    }
}

impl Default for SettingsRecord {
    fn default() -> Self {
        (&Settings::default()).into()
    }
}

impl From<&Settings> for SettingsRecord {
    fn from(s: &Settings) -> Self {
        let Settings {
            alpha,
            leave_one_out,
            checks,
            permutations,
            seed,
            sequential,
        } = *s;
        SettingsRecord {
            alpha,
            leave_one_out,
            checks,
            permutations,
            seed,
            sequential: sequential.as_ref().map(Into::into),
        }
    }
}

impl From<&SettingsRecord> for Settings {
    fn from(s: &SettingsRecord) -> Self {
        Settings {
            alpha: s.alpha,
            leave_one_out: s.leave_one_out,
            checks: s.checks,
            permutations: s.permutations,
            seed: s.seed,
            sequential: s.sequential.as_ref().map(Into::into),
        }
    }
}

/// `unmatched[]`: a column not compared, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnmatchedRecord {
    /// Lot (0 or 1) the column is in.
    pub lot: usize,
    /// Column header.
    pub column: String,
    /// Why it is left out.
    pub why: String,
}

impl From<&Unmatched> for UnmatchedRecord {
    fn from(u: &Unmatched) -> Self {
        let Unmatched { lot, column, why } = u;
        UnmatchedRecord {
            lot: *lot,
            column: column.clone(),
            why: why.clone(),
        }
    }
}

/// `hotelling`: the two-sample T² test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HotellingRecord {
    /// T².
    #[serde(deserialize_with = "nan::de")]
    pub t2: f64,
    /// F statistic.
    #[serde(deserialize_with = "nan::de")]
    pub f: f64,
    /// Numerator df.
    #[serde(deserialize_with = "nan::de")]
    pub df1: f64,
    /// Denominator df.
    #[serde(deserialize_with = "nan::de")]
    pub df2: f64,
    /// p-value.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
    /// Critical T² at alpha.
    #[serde(deserialize_with = "nan::de")]
    pub critical_t2: f64,
    /// Critical F at alpha.
    #[serde(deserialize_with = "nan::de")]
    pub critical_f: f64,
    /// Squared Mahalanobis distance between the means.
    #[serde(deserialize_with = "nan::de")]
    pub mahalanobis_d2: f64,
    /// The lots differ at alpha.
    pub differ: bool,
}

impl From<&HotellingResult> for HotellingRecord {
    fn from(h: &HotellingResult) -> Self {
        let HotellingResult {
            t2,
            f,
            df1,
            df2,
            p_value,
            critical_t2,
            critical_f,
            mahalanobis_d2,
            differ,
        } = *h;
        HotellingRecord {
            t2,
            f,
            df1,
            df2,
            p_value,
            critical_t2,
            critical_f,
            mahalanobis_d2,
            differ,
        }
    }
}

impl From<&HotellingRecord> for HotellingResult {
    fn from(h: &HotellingRecord) -> Self {
        HotellingResult {
            t2: h.t2,
            f: h.f,
            df1: h.df1,
            df2: h.df2,
            p_value: h.p_value,
            critical_t2: h.critical_t2,
            critical_f: h.critical_f,
            mahalanobis_d2: h.mahalanobis_d2,
            differ: h.differ,
        }
    }
}

/// `intervals[]`: the follow-up intervals of one characteristic's mean difference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IntervalRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// Mean difference, candidate − reference (reference − candidate in schema `/1`).
    #[serde(deserialize_with = "nan::de")]
    pub difference: f64,
    /// Its standard error.
    #[serde(deserialize_with = "nan::de")]
    pub standard_error: f64,
    /// Simultaneous (T²) interval.
    #[serde(deserialize_with = "nan::de")]
    pub simultaneous: [f64; 2],
    /// Bonferroni interval.
    #[serde(deserialize_with = "nan::de")]
    pub bonferroni: [f64; 2],
    /// One-at-a-time interval.
    #[serde(deserialize_with = "nan::de")]
    pub one_at_a_time: [f64; 2],
    /// Whether each of the three excludes zero.
    pub excludes_zero: [bool; 3],
}

impl From<&Interval> for IntervalRecord {
    fn from(i: &Interval) -> Self {
        let Interval {
            characteristic,
            difference,
            standard_error,
            simultaneous,
            bonferroni,
            one_at_a_time,
            excludes_zero,
        } = i;
        IntervalRecord {
            characteristic: characteristic.clone(),
            difference: *difference,
            standard_error: *standard_error,
            simultaneous: *simultaneous,
            bonferroni: *bonferroni,
            one_at_a_time: *one_at_a_time,
            excludes_zero: *excludes_zero,
        }
    }
}

impl From<&IntervalRecord> for Interval {
    fn from(i: &IntervalRecord) -> Self {
        Interval {
            characteristic: i.characteristic.clone(),
            difference: i.difference,
            standard_error: i.standard_error,
            simultaneous: i.simultaneous,
            bonferroni: i.bonferroni,
            one_at_a_time: i.one_at_a_time,
            excludes_zero: i.excludes_zero,
        }
    }
}

/// `discriminant.score_histogram`: both lots' discriminant scores on common bins.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScoreHistogramRecord {
    /// Left edge of the first bin.
    #[serde(deserialize_with = "nan::de")]
    pub start: f64,
    /// Bin width.
    #[serde(deserialize_with = "nan::de")]
    pub width: f64,
    /// Units per bin, per lot.
    pub counts: [Vec<usize>; 2],
}

impl From<&ScoreHistogram> for ScoreHistogramRecord {
    fn from(h: &ScoreHistogram) -> Self {
        let ScoreHistogram {
            start,
            width,
            counts,
        } = h;
        ScoreHistogramRecord {
            start: *start,
            width: *width,
            counts: counts.clone(),
        }
    }
}

impl From<&ScoreHistogramRecord> for ScoreHistogram {
    fn from(h: &ScoreHistogramRecord) -> Self {
        ScoreHistogram {
            start: h.start,
            width: h.width,
            counts: h.counts.clone(),
        }
    }
}

/// `discriminant`: Fisher's discriminant direction (the unit scores are not written).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DiscriminantRecord {
    /// Raw coefficients.
    #[serde(deserialize_with = "nan::de")]
    pub coefficients: Vec<f64>,
    /// Standardized coefficients.
    #[serde(deserialize_with = "nan::de")]
    pub standardized: Vec<f64>,
    /// Structure correlations.
    #[serde(deserialize_with = "nan::de")]
    pub structure: Vec<f64>,
    /// Allocation cut-off on the raw score.
    #[serde(deserialize_with = "nan::de")]
    pub cutoff: f64,
    /// Units misclassified by the rule fitted to all units, per lot.
    pub apparent_misclassified: Option<[usize; 2]>,
    /// Units misclassified with each held out of the fit, per lot.
    pub leave_one_out_misclassified: Option<[usize; 2]>,
    /// Leave-one-out misclassification rate.
    pub leave_one_out_rate: Option<f64>,
    /// Histogram of the scores.
    pub score_histogram: Option<ScoreHistogramRecord>,
}

impl From<&Discriminant> for DiscriminantRecord {
    fn from(d: &Discriminant) -> Self {
        let Discriminant {
            coefficients,
            standardized,
            structure,
            cutoff,
            apparent_misclassified,
            leave_one_out_misclassified,
            leave_one_out_rate,
            score_histogram,
            // Not written to the record.
            scores: _,
        } = d;
        DiscriminantRecord {
            coefficients: coefficients.clone(),
            standardized: standardized.clone(),
            structure: structure.clone(),
            cutoff: *cutoff,
            apparent_misclassified: *apparent_misclassified,
            leave_one_out_misclassified: *leave_one_out_misclassified,
            leave_one_out_rate: *leave_one_out_rate,
            score_histogram: score_histogram.as_ref().map(Into::into),
        }
    }
}

impl From<&DiscriminantRecord> for Discriminant {
    /// The unit scores are not in the record: `scores` is `None`.
    fn from(d: &DiscriminantRecord) -> Self {
        Discriminant {
            coefficients: d.coefficients.clone(),
            standardized: d.standardized.clone(),
            structure: d.structure.clone(),
            cutoff: d.cutoff,
            apparent_misclassified: d.apparent_misclassified,
            leave_one_out_misclassified: d.leave_one_out_misclassified,
            leave_one_out_rate: d.leave_one_out_rate,
            score_histogram: d.score_histogram.as_ref().map(Into::into),
            scores: None,
        }
    }
}

/// `ranking[]`: how much one characteristic drives the shift.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RankingRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// Drop in T² without it.
    #[serde(deserialize_with = "nan::de")]
    pub t2_drop: f64,
    /// Standardized discriminant coefficient.
    #[serde(deserialize_with = "nan::de")]
    pub standardized_coefficient: f64,
}

impl From<&Contribution> for RankingRecord {
    fn from(c: &Contribution) -> Self {
        let Contribution {
            characteristic,
            t2_drop,
            standardized_coefficient,
        } = c;
        RankingRecord {
            characteristic: characteristic.clone(),
            t2_drop: *t2_drop,
            standardized_coefficient: *standardized_coefficient,
        }
    }
}

impl From<&RankingRecord> for Contribution {
    fn from(c: &RankingRecord) -> Self {
        Contribution {
            characteristic: c.characteristic.clone(),
            t2_drop: c.t2_drop,
            standardized_coefficient: c.standardized_coefficient,
        }
    }
}

/// `per_characteristic[].lots[]`: one characteristic's summary in one lot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ColumnSummaryRecord {
    /// Units used.
    pub n: usize,
    /// Mean.
    #[serde(deserialize_with = "nan::de")]
    pub mean: f64,
    /// Standard deviation (divisor n − 1).
    #[serde(deserialize_with = "nan::de")]
    pub sd: f64,
    /// Smallest value (null from summary statistics).
    #[serde(deserialize_with = "nan::de")]
    pub min: f64,
    /// Median (null from summary statistics).
    #[serde(deserialize_with = "nan::de")]
    pub median: f64,
    /// Largest value (null from summary statistics).
    #[serde(deserialize_with = "nan::de")]
    pub max: f64,
    /// Decimal places the measurements carry (null from summary statistics or for values with
    /// more than 9); means are written to one place more.
    #[serde(default)]
    pub decimals: Option<u8>,
}

impl From<&ColumnSummary> for ColumnSummaryRecord {
    fn from(c: &ColumnSummary) -> Self {
        let ColumnSummary {
            n,
            mean,
            sd,
            min,
            median,
            max,
            decimals,
        } = *c;
        ColumnSummaryRecord {
            n,
            mean,
            sd,
            min,
            median,
            max,
            decimals,
        }
    }
}

impl From<&ColumnSummaryRecord> for ColumnSummary {
    fn from(c: &ColumnSummaryRecord) -> Self {
        ColumnSummary {
            n: c.n,
            mean: c.mean,
            sd: c.sd,
            min: c.min,
            median: c.median,
            max: c.max,
            decimals: c.decimals,
        }
    }
}

/// `per_characteristic[]`: one characteristic's summaries and univariate tests.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CharacteristicRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// Unit of measure.
    pub unit: Option<String>,
    /// Summary in each lot.
    pub lots: [ColumnSummaryRecord; 2],
    /// Mean difference, candidate − reference (reference − candidate in schema `/1`).
    #[serde(deserialize_with = "nan::de")]
    pub difference: f64,
    /// Pooled standard deviation.
    #[serde(deserialize_with = "nan::de")]
    pub pooled_sd: f64,
    /// Difference over the pooled SD.
    #[serde(deserialize_with = "nan::de")]
    pub standardized_difference: f64,
    /// Pooled-variance t.
    #[serde(deserialize_with = "nan::de")]
    pub pooled_t: f64,
    /// Its df.
    #[serde(deserialize_with = "nan::de")]
    pub pooled_df: f64,
    /// Its two-sided p-value.
    #[serde(deserialize_with = "nan::de")]
    pub pooled_p: f64,
    /// Welch's t.
    #[serde(deserialize_with = "nan::de")]
    pub welch_t: f64,
    /// Welch–Satterthwaite df.
    #[serde(deserialize_with = "nan::de")]
    pub welch_df: f64,
    /// Its two-sided p-value.
    #[serde(deserialize_with = "nan::de")]
    pub welch_p: f64,
}

impl From<&CharacteristicResult> for CharacteristicRecord {
    fn from(c: &CharacteristicResult) -> Self {
        let CharacteristicResult {
            characteristic,
            unit,
            lots,
            difference,
            pooled_sd,
            standardized_difference,
            pooled_t,
            pooled_df,
            pooled_p,
            welch_t,
            welch_df,
            welch_p,
        } = c;
        CharacteristicRecord {
            characteristic: characteristic.clone(),
            unit: unit.clone(),
            lots: [(&lots[0]).into(), (&lots[1]).into()],
            difference: *difference,
            pooled_sd: *pooled_sd,
            standardized_difference: *standardized_difference,
            pooled_t: *pooled_t,
            pooled_df: *pooled_df,
            pooled_p: *pooled_p,
            welch_t: *welch_t,
            welch_df: *welch_df,
            welch_p: *welch_p,
        }
    }
}

impl From<&CharacteristicRecord> for CharacteristicResult {
    fn from(c: &CharacteristicRecord) -> Self {
        CharacteristicResult {
            characteristic: c.characteristic.clone(),
            unit: c.unit.clone(),
            lots: [(&c.lots[0]).into(), (&c.lots[1]).into()],
            difference: c.difference,
            pooled_sd: c.pooled_sd,
            standardized_difference: c.standardized_difference,
            pooled_t: c.pooled_t,
            pooled_df: c.pooled_df,
            pooled_p: c.pooled_p,
            welch_t: c.welch_t,
            welch_df: c.welch_df,
            welch_p: c.welch_p,
        }
    }
}

/// `box_m`: Box's M test of equal covariance matrices.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BoxMRecord {
    /// Box's M.
    #[serde(deserialize_with = "nan::de")]
    pub m: f64,
    /// Chi-square approximation.
    #[serde(deserialize_with = "nan::de")]
    pub chi2: f64,
    /// Its df.
    #[serde(deserialize_with = "nan::de")]
    pub df: f64,
    /// Its p-value.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
    /// F approximation.
    #[serde(deserialize_with = "nan::de")]
    pub f: f64,
    /// Its numerator df.
    #[serde(deserialize_with = "nan::de")]
    pub f_df1: f64,
    /// Its denominator df.
    #[serde(deserialize_with = "nan::de")]
    pub f_df2: f64,
    /// Its p-value.
    #[serde(deserialize_with = "nan::de")]
    pub f_p_value: f64,
    /// The approximation to read: `"chi-square"` or `"F"`.
    pub preferred: String,
    /// Why that one.
    pub why: String,
}

impl From<&BoxM> for BoxMRecord {
    fn from(b: &BoxM) -> Self {
        let BoxM {
            m,
            chi2,
            df,
            p_value,
            f,
            f_df1,
            f_df2,
            f_p_value,
            preferred,
            why,
        } = b;
        BoxMRecord {
            m: *m,
            chi2: *chi2,
            df: *df,
            p_value: *p_value,
            f: *f,
            f_df1: *f_df1,
            f_df2: *f_df2,
            f_p_value: *f_p_value,
            preferred: preferred.clone(),
            why: why.clone(),
        }
    }
}

impl From<&BoxMRecord> for BoxM {
    fn from(b: &BoxMRecord) -> Self {
        BoxM {
            m: b.m,
            chi2: b.chi2,
            df: b.df,
            p_value: b.p_value,
            f: b.f,
            f_df1: b.f_df1,
            f_df2: b.f_df2,
            f_p_value: b.f_p_value,
            preferred: b.preferred.clone(),
            why: b.why.clone(),
        }
    }
}

/// `mardia[]`: Mardia's multivariate skewness and kurtosis of one lot.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MardiaRecord {
    /// Lot name.
    pub lot: String,
    /// `b1,p`.
    #[serde(deserialize_with = "nan::de")]
    pub skewness: f64,
    /// `n b1,p / 6`.
    #[serde(deserialize_with = "nan::de")]
    pub skewness_stat: f64,
    /// Its chi-square df.
    #[serde(deserialize_with = "nan::de")]
    pub skewness_df: f64,
    /// Its p-value.
    #[serde(deserialize_with = "nan::de")]
    pub skewness_p: f64,
    /// `b2,p`.
    #[serde(deserialize_with = "nan::de")]
    pub kurtosis: f64,
    /// Standardized kurtosis.
    #[serde(deserialize_with = "nan::de")]
    pub kurtosis_z: f64,
    /// Its two-sided p-value.
    #[serde(deserialize_with = "nan::de")]
    pub kurtosis_p: f64,
}

impl From<&Mardia> for MardiaRecord {
    fn from(m: &Mardia) -> Self {
        let Mardia {
            lot,
            skewness,
            skewness_stat,
            skewness_df,
            skewness_p,
            kurtosis,
            kurtosis_z,
            kurtosis_p,
        } = m;
        MardiaRecord {
            lot: lot.clone(),
            skewness: *skewness,
            skewness_stat: *skewness_stat,
            skewness_df: *skewness_df,
            skewness_p: *skewness_p,
            kurtosis: *kurtosis,
            kurtosis_z: *kurtosis_z,
            kurtosis_p: *kurtosis_p,
        }
    }
}

impl From<&MardiaRecord> for Mardia {
    fn from(m: &MardiaRecord) -> Self {
        Mardia {
            lot: m.lot.clone(),
            skewness: m.skewness,
            skewness_stat: m.skewness_stat,
            skewness_df: m.skewness_df,
            skewness_p: m.skewness_p,
            kurtosis: m.kurtosis,
            kurtosis_z: m.kurtosis_z,
            kurtosis_p: m.kurtosis_p,
        }
    }
}

/// `normality[].lots[]`: Shapiro–Wilk in one lot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ShapiroWilkRecord {
    /// Units.
    pub n: usize,
    /// W statistic.
    #[serde(deserialize_with = "nan::de")]
    pub w: f64,
    /// p-value.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
    /// False when n is outside the range where the p-value is validated.
    pub p_value_validated: bool,
}

impl From<&ShapiroWilk> for ShapiroWilkRecord {
    fn from(s: &ShapiroWilk) -> Self {
        let ShapiroWilk {
            n,
            w,
            p_value,
            p_value_validated,
        } = *s;
        ShapiroWilkRecord {
            n,
            w,
            p_value,
            p_value_validated,
        }
    }
}

impl From<&ShapiroWilkRecord> for ShapiroWilk {
    fn from(s: &ShapiroWilkRecord) -> Self {
        ShapiroWilk {
            n: s.n,
            w: s.w,
            p_value: s.p_value,
            p_value_validated: s.p_value_validated,
        }
    }
}

/// `normality[].large[]`: normality of one characteristic in a lot above Shapiro–Wilk's range.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LargeLotNormalityRecord {
    /// Units.
    pub n: usize,
    /// Sample skewness `√b1`.
    #[serde(deserialize_with = "nan::de")]
    pub skewness: f64,
    /// Excess kurtosis `b2 − 3`.
    #[serde(deserialize_with = "nan::de")]
    pub excess_kurtosis: f64,
    /// Anderson–Darling `A²`.
    #[serde(deserialize_with = "nan::de")]
    pub anderson_darling: f64,
    /// `A²` modified for estimated parameters.
    #[serde(deserialize_with = "nan::de")]
    pub anderson_darling_modified: f64,
    /// Its p-value.
    #[serde(deserialize_with = "nan::de")]
    pub anderson_darling_p: f64,
    /// Normal deviate of the skewness.
    #[serde(deserialize_with = "nan::de")]
    pub z_skewness: f64,
    /// Normal deviate of the kurtosis.
    #[serde(deserialize_with = "nan::de")]
    pub z_kurtosis: f64,
    /// `K²`.
    #[serde(deserialize_with = "nan::de")]
    pub k2: f64,
    /// Its p-value.
    #[serde(deserialize_with = "nan::de")]
    pub k2_p: f64,
}

impl From<&LargeLotNormality> for LargeLotNormalityRecord {
    fn from(l: &LargeLotNormality) -> Self {
        let LargeLotNormality {
            n,
            skewness,
            excess_kurtosis,
            anderson_darling,
            anderson_darling_modified,
            anderson_darling_p,
            z_skewness,
            z_kurtosis,
            k2,
            k2_p,
        } = *l;
        LargeLotNormalityRecord {
            n,
            skewness,
            excess_kurtosis,
            anderson_darling,
            anderson_darling_modified,
            anderson_darling_p,
            z_skewness,
            z_kurtosis,
            k2,
            k2_p,
        }
    }
}

impl From<&LargeLotNormalityRecord> for LargeLotNormality {
    fn from(l: &LargeLotNormalityRecord) -> Self {
        LargeLotNormality {
            n: l.n,
            skewness: l.skewness,
            excess_kurtosis: l.excess_kurtosis,
            anderson_darling: l.anderson_darling,
            anderson_darling_modified: l.anderson_darling_modified,
            anderson_darling_p: l.anderson_darling_p,
            z_skewness: l.z_skewness,
            z_kurtosis: l.z_kurtosis,
            k2: l.k2,
            k2_p: l.k2_p,
        }
    }
}

/// `normality[]`: normality of one characteristic in both lots.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NormalityRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// Shapiro–Wilk per lot (null with fewer than 3 units or no spread).
    pub lots: [Option<ShapiroWilkRecord>; 2],
    /// Per lot above Shapiro–Wilk's range: Anderson–Darling and K² (null otherwise).
    #[serde(default)]
    pub large: [Option<LargeLotNormalityRecord>; 2],
}

impl From<&NormalityRow> for NormalityRecord {
    fn from(r: &NormalityRow) -> Self {
        let NormalityRow {
            characteristic,
            lots,
            large,
        } = r;
        NormalityRecord {
            characteristic: characteristic.clone(),
            lots: [
                lots[0].as_ref().map(Into::into),
                lots[1].as_ref().map(Into::into),
            ],
            large: [
                large[0].as_ref().map(Into::into),
                large[1].as_ref().map(Into::into),
            ],
        }
    }
}

impl From<&NormalityRecord> for NormalityRow {
    fn from(r: &NormalityRecord) -> Self {
        NormalityRow {
            characteristic: r.characteristic.clone(),
            lots: [
                r.lots[0].as_ref().map(Into::into),
                r.lots[1].as_ref().map(Into::into),
            ],
            large: [
                r.large[0].as_ref().map(Into::into),
                r.large[1].as_ref().map(Into::into),
            ],
        }
    }
}

/// `unequal_covariance`: the Krishnamoorthy–Yu test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnequalCovarianceRecord {
    /// T² with the unpooled covariance.
    #[serde(deserialize_with = "nan::de")]
    pub t2: f64,
    /// Approximate df ν.
    #[serde(deserialize_with = "nan::de")]
    pub nu: f64,
    /// F statistic.
    #[serde(deserialize_with = "nan::de")]
    pub f: f64,
    /// Numerator df.
    #[serde(deserialize_with = "nan::de")]
    pub df1: f64,
    /// Denominator df.
    #[serde(deserialize_with = "nan::de")]
    pub df2: f64,
    /// p-value.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
}

impl From<&UnequalCovariance> for UnequalCovarianceRecord {
    fn from(u: &UnequalCovariance) -> Self {
        let UnequalCovariance {
            t2,
            nu,
            f,
            df1,
            df2,
            p_value,
        } = *u;
        UnequalCovarianceRecord {
            t2,
            nu,
            f,
            df1,
            df2,
            p_value,
        }
    }
}

impl From<&UnequalCovarianceRecord> for UnequalCovariance {
    fn from(u: &UnequalCovarianceRecord) -> Self {
        UnequalCovariance {
            t2: u.t2,
            nu: u.nu,
            f: u.f,
            df1: u.df1,
            df2: u.df2,
            p_value: u.p_value,
        }
    }
}

/// `permutation`: the permutation p-value of T².
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PermutationRecord {
    /// Relabellings asked for (the most drawn).
    pub permutations: usize,
    /// Seed of the draws.
    pub seed: u64,
    /// Relabellings drawn whose T² reached the observed one.
    pub at_least_observed: usize,
    /// The p-value (with `p_interval`, the interval's end nearer alpha).
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
    /// Relabellings drawn (absent in a record made before sequential stopping: all were).
    #[serde(default)]
    pub drawn: usize,
    /// What ended the draws.
    #[serde(default)]
    pub stopped_by: StoppedByRecord,
    /// The p-value as an interval `[lo, hi]` when one of Gandy's boundaries stopped the draws
    /// (null otherwise).
    #[serde(default, deserialize_with = "nan::de")]
    pub p_interval: Option<[f64; 2]>,
    /// Why the draws stopped, in words.
    #[serde(default)]
    pub why: String,
}

/// `permutation.stopped_by`: what ended the relabellings, written as a word.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StoppedByRecord {
    /// `"all_drawn"`: sequential stopping was off.
    #[default]
    AllDrawn,
    /// `"hits"`: Besag & Clifford's h-th relabelling reaching the observed T².
    Hits,
    /// `"lower_boundary"`: Gandy's lower boundary, p below alpha.
    LowerBoundary,
    /// `"upper_boundary"`: Gandy's upper boundary, p above alpha.
    UpperBoundary,
    /// `"limit"`: no rule stopped the draws within one fewer than asked for.
    Limit,
}

impl From<StoppedBy> for StoppedByRecord {
    fn from(s: StoppedBy) -> Self {
        match s {
            StoppedBy::All => StoppedByRecord::AllDrawn,
            StoppedBy::Hits => StoppedByRecord::Hits,
            StoppedBy::LowerBoundary => StoppedByRecord::LowerBoundary,
            StoppedBy::UpperBoundary => StoppedByRecord::UpperBoundary,
            StoppedBy::Limit => StoppedByRecord::Limit,
        }
    }
}

impl From<StoppedByRecord> for StoppedBy {
    fn from(s: StoppedByRecord) -> Self {
        match s {
            StoppedByRecord::AllDrawn => StoppedBy::All,
            StoppedByRecord::Hits => StoppedBy::Hits,
            StoppedByRecord::LowerBoundary => StoppedBy::LowerBoundary,
            StoppedByRecord::UpperBoundary => StoppedBy::UpperBoundary,
            StoppedByRecord::Limit => StoppedBy::Limit,
        }
    }
}

impl From<&PermutationResult> for PermutationRecord {
    fn from(p: &PermutationResult) -> Self {
        let PermutationResult {
            permutations,
            seed,
            at_least_observed,
            p_value,
            drawn,
            stopped_by,
            p_interval,
            ref why,
        } = *p;
        PermutationRecord {
            permutations,
            seed,
            at_least_observed,
            p_value,
            drawn,
            stopped_by: stopped_by.into(),
            p_interval,
            why: why.clone(),
        }
    }
}

impl From<&PermutationRecord> for PermutationResult {
    fn from(p: &PermutationRecord) -> Self {
        PermutationResult {
            permutations: p.permutations,
            seed: p.seed,
            at_least_observed: p.at_least_observed,
            p_value: p.p_value,
            drawn: p.drawn,
            stopped_by: p.stopped_by.into(),
            p_interval: p.p_interval,
            why: p.why.clone(),
        }
    }
}

/// `favoured.test`: the test the assumption checks favour, written as its name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum FavouredTestRecord {
    /// `"pooled T²"`.
    #[serde(rename = "pooled T²")]
    PooledT2,
    /// `"unequal-covariance test"`.
    #[serde(rename = "unequal-covariance test")]
    UnequalCovariance,
    /// `"permutation p-value"`.
    #[serde(rename = "permutation p-value")]
    Permutation,
}

impl From<FavouredTest> for FavouredTestRecord {
    fn from(t: FavouredTest) -> Self {
        match t {
            FavouredTest::PooledT2 => FavouredTestRecord::PooledT2,
            FavouredTest::UnequalCovariance => FavouredTestRecord::UnequalCovariance,
            FavouredTest::Permutation => FavouredTestRecord::Permutation,
        }
    }
}

impl From<FavouredTestRecord> for FavouredTest {
    fn from(t: FavouredTestRecord) -> Self {
        match t {
            FavouredTestRecord::PooledT2 => FavouredTest::PooledT2,
            FavouredTestRecord::UnequalCovariance => FavouredTest::UnequalCovariance,
            FavouredTestRecord::Permutation => FavouredTest::Permutation,
        }
    }
}

/// `favoured`: which test the checks favour, and why.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FavouredRecord {
    /// The favoured test.
    pub test: FavouredTestRecord,
    /// The reason in words.
    pub why: String,
    /// That test's p-value.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
}

impl From<&Favoured> for FavouredRecord {
    fn from(f: &Favoured) -> Self {
        let Favoured { test, why, p_value } = f;
        FavouredRecord {
            test: (*test).into(),
            why: why.clone(),
            p_value: *p_value,
        }
    }
}

impl From<&FavouredRecord> for Favoured {
    fn from(f: &FavouredRecord) -> Self {
        Favoured {
            test: f.test.into(),
            why: f.why.clone(),
            p_value: f.p_value,
        }
    }
}

/// `specification.rule`: `"file_only"`, `{"tolerance_fraction": F}` or `{"reference_sd": K}`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MarginRuleRecord {
    /// Only the file's margins.
    FileOnly,
    /// `F ×` the tolerance width.
    ToleranceFraction(#[serde(deserialize_with = "nan::de")] f64),
    /// `K ×` the reference lot's SD.
    ReferenceSd(#[serde(deserialize_with = "nan::de")] f64),
}

impl From<MarginRule> for MarginRuleRecord {
    fn from(r: MarginRule) -> Self {
        match r {
            MarginRule::FileOnly => MarginRuleRecord::FileOnly,
            MarginRule::ToleranceFraction(f) => MarginRuleRecord::ToleranceFraction(f),
            MarginRule::ReferenceSd(k) => MarginRuleRecord::ReferenceSd(k),
        }
    }
}

impl From<MarginRuleRecord> for MarginRule {
    fn from(r: MarginRuleRecord) -> Self {
        match r {
            MarginRuleRecord::FileOnly => MarginRule::FileOnly,
            MarginRuleRecord::ToleranceFraction(f) => MarginRule::ToleranceFraction(f),
            MarginRuleRecord::ReferenceSd(k) => MarginRule::ReferenceSd(k),
        }
    }
}

/// `specification.characteristics[].margin_from`: `"file"` or `"rule"`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MarginFromRecord {
    /// The specification file.
    File,
    /// The margin rule.
    Rule,
}

impl From<MarginFrom> for MarginFromRecord {
    fn from(m: MarginFrom) -> Self {
        match m {
            MarginFrom::File => MarginFromRecord::File,
            MarginFrom::Rule => MarginFromRecord::Rule,
        }
    }
}

impl From<MarginFromRecord> for MarginFrom {
    fn from(m: MarginFromRecord) -> Self {
        match m {
            MarginFromRecord::File => MarginFrom::File,
            MarginFromRecord::Rule => MarginFrom::Rule,
        }
    }
}

/// `specification.characteristics[]`: one characteristic's limits and margin.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpecEntryRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// Lower specification limit.
    pub lower: Option<f64>,
    /// Target.
    pub target: Option<f64>,
    /// Upper specification limit.
    pub upper: Option<f64>,
    /// Allowed candidate − reference range.
    #[serde(deserialize_with = "nan::de")]
    pub margin: Option<[f64; 2]>,
    /// Where the margin came from.
    #[serde(default)]
    pub margin_from: Option<MarginFromRecord>,
}

impl From<&SpecEntry> for SpecEntryRecord {
    fn from(e: &SpecEntry) -> Self {
        let SpecEntry {
            characteristic,
            lower,
            target,
            upper,
            margin,
            margin_from,
        } = e;
        SpecEntryRecord {
            characteristic: characteristic.clone(),
            lower: *lower,
            target: *target,
            upper: *upper,
            margin: *margin,
            margin_from: margin_from.map(Into::into),
        }
    }
}

impl From<&SpecEntryRecord> for SpecEntry {
    fn from(e: &SpecEntryRecord) -> Self {
        SpecEntry {
            characteristic: e.characteristic.clone(),
            lower: e.lower,
            target: e.target,
            upper: e.upper,
            margin: e.margin,
            margin_from: e.margin_from.map(Into::into),
        }
    }
}

/// `specification`: the limits and margins compared against.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpecificationRecord {
    /// Specification file name.
    pub file: Option<String>,
    /// Its SHA-256.
    pub sha256: Option<String>,
    /// Margin rule for characteristics the file gives none.
    pub rule: MarginRuleRecord,
    /// Margin on the Mahalanobis distance between the means.
    #[serde(default)]
    pub distance_margin: Option<f64>,
    /// One entry per compared characteristic.
    pub characteristics: Vec<SpecEntryRecord>,
}

impl From<&Specification> for SpecificationRecord {
    fn from(s: &Specification) -> Self {
        let Specification {
            file,
            sha256,
            rule,
            distance_margin,
            characteristics,
        } = s;
        SpecificationRecord {
            file: file.clone(),
            sha256: sha256.clone(),
            rule: (*rule).into(),
            distance_margin: *distance_margin,
            characteristics: characteristics.iter().map(Into::into).collect(),
        }
    }
}

impl From<&SpecificationRecord> for Specification {
    fn from(s: &SpecificationRecord) -> Self {
        Specification {
            file: s.file.clone(),
            sha256: s.sha256.clone(),
            rule: s.rule.into(),
            distance_margin: s.distance_margin,
            characteristics: s.characteristics.iter().map(Into::into).collect(),
        }
    }
}

/// `equivalence.per_characteristic[]`: two one-sided tests of one characteristic.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EquivalenceRowRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// The margin.
    #[serde(deserialize_with = "nan::de")]
    pub margin: [f64; 2],
    /// Candidate − reference.
    #[serde(deserialize_with = "nan::de")]
    pub difference: f64,
    /// The 1 − 2 alpha interval (Welch).
    #[serde(deserialize_with = "nan::de")]
    pub interval: [f64; 2],
    /// TOST p-value, pooled variance.
    #[serde(deserialize_with = "nan::de")]
    pub pooled_p: f64,
    /// TOST p-value, Welch.
    #[serde(deserialize_with = "nan::de")]
    pub welch_p: f64,
    /// Shown within the margin.
    pub equivalent: bool,
    /// Wholly outside the margin.
    pub beyond: bool,
}

impl From<&EquivalenceRow> for EquivalenceRowRecord {
    fn from(r: &EquivalenceRow) -> Self {
        let EquivalenceRow {
            characteristic,
            margin,
            difference,
            interval,
            pooled_p,
            welch_p,
            equivalent,
            beyond,
        } = r;
        EquivalenceRowRecord {
            characteristic: characteristic.clone(),
            margin: *margin,
            difference: *difference,
            interval: *interval,
            pooled_p: *pooled_p,
            welch_p: *welch_p,
            equivalent: *equivalent,
            beyond: *beyond,
        }
    }
}

impl From<&EquivalenceRowRecord> for EquivalenceRow {
    fn from(r: &EquivalenceRowRecord) -> Self {
        EquivalenceRow {
            characteristic: r.characteristic.clone(),
            margin: r.margin,
            difference: r.difference,
            interval: r.interval,
            pooled_p: r.pooled_p,
            welch_p: r.welch_p,
            equivalent: r.equivalent,
            beyond: r.beyond,
        }
    }
}

/// `equivalence.multivariate`: the T² equivalence test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MultivariateEquivalenceRecord {
    /// Margin ε on the distance.
    #[serde(deserialize_with = "nan::de")]
    pub epsilon: f64,
    /// ε was derived from the per-characteristic margins.
    pub epsilon_from_margins: bool,
    /// Squared Mahalanobis distance.
    #[serde(deserialize_with = "nan::de")]
    pub d2: f64,
    /// F statistic.
    #[serde(deserialize_with = "nan::de")]
    pub f: f64,
    /// Numerator df.
    #[serde(deserialize_with = "nan::de")]
    pub df1: f64,
    /// Denominator df.
    #[serde(deserialize_with = "nan::de")]
    pub df2: f64,
    /// Noncentrality at the margin.
    #[serde(deserialize_with = "nan::de")]
    pub noncentrality: f64,
    /// Critical F.
    #[serde(deserialize_with = "nan::de")]
    pub critical_f: f64,
    /// p-value.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
    /// Equivalent within ε.
    pub equivalent: bool,
    /// Upper confidence bound of the distance.
    #[serde(deserialize_with = "nan::de")]
    pub distance_upper_bound: f64,
}

impl From<&MultivariateEquivalence> for MultivariateEquivalenceRecord {
    fn from(m: &MultivariateEquivalence) -> Self {
        let MultivariateEquivalence {
            epsilon,
            epsilon_from_margins,
            d2,
            f,
            df1,
            df2,
            noncentrality,
            critical_f,
            p_value,
            equivalent,
            distance_upper_bound,
        } = *m;
        MultivariateEquivalenceRecord {
            epsilon,
            epsilon_from_margins,
            d2,
            f,
            df1,
            df2,
            noncentrality,
            critical_f,
            p_value,
            equivalent,
            distance_upper_bound,
        }
    }
}

impl From<&MultivariateEquivalenceRecord> for MultivariateEquivalence {
    fn from(m: &MultivariateEquivalenceRecord) -> Self {
        MultivariateEquivalence {
            epsilon: m.epsilon,
            epsilon_from_margins: m.epsilon_from_margins,
            d2: m.d2,
            f: m.f,
            df1: m.df1,
            df2: m.df2,
            noncentrality: m.noncentrality,
            critical_f: m.critical_f,
            p_value: m.p_value,
            equivalent: m.equivalent,
            distance_upper_bound: m.distance_upper_bound,
        }
    }
}

/// `equivalence`: the equivalence tests.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EquivalenceRecord {
    /// Level of each one-sided test.
    #[serde(deserialize_with = "nan::de")]
    pub alpha: f64,
    /// Per characteristic with a margin.
    pub per_characteristic: Vec<EquivalenceRowRecord>,
    /// Every characteristic with a margin shown within it.
    pub all_equivalent: Option<bool>,
    /// The T² equivalence test.
    pub multivariate: Option<MultivariateEquivalenceRecord>,
}

impl From<&Equivalence> for EquivalenceRecord {
    fn from(e: &Equivalence) -> Self {
        let Equivalence {
            alpha,
            per_characteristic,
            all_equivalent,
            multivariate,
        } = e;
        EquivalenceRecord {
            alpha: *alpha,
            per_characteristic: per_characteristic.iter().map(Into::into).collect(),
            all_equivalent: *all_equivalent,
            multivariate: multivariate.as_ref().map(Into::into),
        }
    }
}

impl From<&EquivalenceRecord> for Equivalence {
    fn from(e: &EquivalenceRecord) -> Self {
        Equivalence {
            alpha: e.alpha,
            per_characteristic: e.per_characteristic.iter().map(Into::into).collect(),
            all_equivalent: e.all_equivalent,
            multivariate: e.multivariate.as_ref().map(Into::into),
        }
    }
}

/// `capability[].lots[]`: one lot's capability for one characteristic.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CapabilityLotRecord {
    /// Units.
    pub n: usize,
    /// `Cpk`, `CPU` or `CPL`.
    pub index: String,
    /// Cp (both limits only).
    pub cp: Option<f64>,
    /// Its interval.
    #[serde(deserialize_with = "nan::de")]
    pub cp_interval: Option<[f64; 2]>,
    /// The index's value.
    #[serde(deserialize_with = "nan::de")]
    pub cpk: f64,
    /// Its interval.
    #[serde(deserialize_with = "nan::de")]
    pub cpk_interval: [f64; 2],
    /// Expected ppm out of specification under a normal model.
    #[serde(deserialize_with = "nan::de")]
    pub ppm_expected: f64,
    /// Units observed out of specification.
    pub out_of_spec: Option<usize>,
}

impl From<&CapabilityLot> for CapabilityLotRecord {
    fn from(l: &CapabilityLot) -> Self {
        let CapabilityLot {
            n,
            index,
            cp,
            cp_interval,
            cpk,
            cpk_interval,
            ppm_expected,
            out_of_spec,
        } = l;
        CapabilityLotRecord {
            n: *n,
            index: index.clone(),
            cp: *cp,
            cp_interval: *cp_interval,
            cpk: *cpk,
            cpk_interval: *cpk_interval,
            ppm_expected: *ppm_expected,
            out_of_spec: *out_of_spec,
        }
    }
}

impl From<&CapabilityLotRecord> for CapabilityLot {
    fn from(l: &CapabilityLotRecord) -> Self {
        CapabilityLot {
            n: l.n,
            index: l.index.clone(),
            cp: l.cp,
            cp_interval: l.cp_interval,
            cpk: l.cpk,
            cpk_interval: l.cpk_interval,
            ppm_expected: l.ppm_expected,
            out_of_spec: l.out_of_spec,
        }
    }
}

/// `capability[]`: capability of one characteristic with limits.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CapabilityRecord {
    /// Characteristic name.
    pub characteristic: String,
    /// Per lot.
    pub lots: [CapabilityLotRecord; 2],
}

impl From<&CapabilityRow> for CapabilityRecord {
    fn from(r: &CapabilityRow) -> Self {
        let CapabilityRow {
            characteristic,
            lots,
        } = r;
        CapabilityRecord {
            characteristic: characteristic.clone(),
            lots: [(&lots[0]).into(), (&lots[1]).into()],
        }
    }
}

impl From<&CapabilityRecord> for CapabilityRow {
    fn from(r: &CapabilityRecord) -> Self {
        CapabilityRow {
            characteristic: r.characteristic.clone(),
            lots: [(&r.lots[0]).into(), (&r.lots[1]).into()],
        }
    }
}

/// `in_spec.lots[]`: one lot's fraction inside every limit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InSpecLotRecord {
    /// Expected fraction inside under a normal model.
    #[serde(deserialize_with = "nan::de")]
    pub expected: f64,
    /// Its integration error (three standard errors).
    #[serde(deserialize_with = "nan::de")]
    pub error: f64,
    /// Observed fraction inside.
    pub observed: Option<f64>,
}

impl From<&InSpecLot> for InSpecLotRecord {
    fn from(l: &InSpecLot) -> Self {
        let InSpecLot {
            expected,
            error,
            observed,
        } = *l;
        InSpecLotRecord {
            expected,
            error,
            observed,
        }
    }
}

impl From<&InSpecLotRecord> for InSpecLot {
    fn from(l: &InSpecLotRecord) -> Self {
        InSpecLot {
            expected: l.expected,
            error: l.error,
            observed: l.observed,
        }
    }
}

/// `in_spec`: the fraction of units inside every limit at once.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InSpecRecord {
    /// The characteristics with limits.
    pub characteristics: Vec<String>,
    /// Per lot.
    pub lots: [InSpecLotRecord; 2],
}

impl From<&InSpec> for InSpecRecord {
    fn from(s: &InSpec) -> Self {
        let InSpec {
            characteristics,
            lots,
        } = s;
        InSpecRecord {
            characteristics: characteristics.clone(),
            lots: [(&lots[0]).into(), (&lots[1]).into()],
        }
    }
}

impl From<&InSpecRecord> for InSpec {
    fn from(s: &InSpecRecord) -> Self {
        InSpec {
            characteristics: s.characteristics.clone(),
            lots: [(&s.lots[0]).into(), (&s.lots[1]).into()],
        }
    }
}

/// `outcome`: the four-way result of the difference and equivalence tests.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum OutcomeRecord {
    /// `differ_beyond_margins`.
    DifferBeyondMargins,
    /// `differ_within_margins`.
    DifferWithinMargins,
    /// `equivalent`.
    Equivalent,
    /// `inconclusive`.
    Inconclusive,
}

impl From<Outcome> for OutcomeRecord {
    fn from(o: Outcome) -> Self {
        match o {
            Outcome::DifferBeyondMargins => OutcomeRecord::DifferBeyondMargins,
            Outcome::DifferWithinMargins => OutcomeRecord::DifferWithinMargins,
            Outcome::Equivalent => OutcomeRecord::Equivalent,
            Outcome::Inconclusive => OutcomeRecord::Inconclusive,
        }
    }
}

impl From<OutcomeRecord> for Outcome {
    fn from(o: OutcomeRecord) -> Self {
        match o {
            OutcomeRecord::DifferBeyondMargins => Outcome::DifferBeyondMargins,
            OutcomeRecord::DifferWithinMargins => Outcome::DifferWithinMargins,
            OutcomeRecord::Equivalent => Outcome::Equivalent,
            OutcomeRecord::Inconclusive => Outcome::Inconclusive,
        }
    }
}

/// `exclusions[]`: a unit set aside before the comparison, located in its file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExclusionRecord {
    /// Lot: 0 reference, 1 candidate.
    pub lot: usize,
    /// Row of the lot file, as a spreadsheet shows it.
    pub row: u32,
    /// The unit's labels, `[header, value]`.
    pub labels: Vec<(String, String)>,
    /// Why it is set aside.
    pub reason: String,
}

impl From<&Exclusion> for ExclusionRecord {
    fn from(e: &Exclusion) -> Self {
        let Exclusion {
            lot,
            row,
            labels,
            reason,
        } = e;
        ExclusionRecord {
            lot: *lot,
            row: *row,
            labels: labels.clone(),
            reason: reason.clone(),
        }
    }
}

impl From<&ExclusionRecord> for Exclusion {
    fn from(e: &ExclusionRecord) -> Self {
        Exclusion {
            lot: e.lot,
            row: e.row,
            labels: e.labels.clone(),
            reason: e.reason.clone(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The names the record writes are the engine's words for the same things.
    #[test]
    fn written_names_match_the_engine_words() {
        for t in [
            FavouredTest::PooledT2,
            FavouredTest::UnequalCovariance,
            FavouredTest::Permutation,
        ] {
            let written = serde_json::to_value(FavouredTestRecord::from(t)).unwrap();
            assert_eq!(written, serde_json::json!(t.name()));
            assert_eq!(FavouredTest::from(FavouredTestRecord::from(t)), t);
        }
        for o in [
            Outcome::DifferBeyondMargins,
            Outcome::DifferWithinMargins,
            Outcome::Equivalent,
            Outcome::Inconclusive,
        ] {
            assert_eq!(Outcome::from(OutcomeRecord::from(o)), o);
        }
        for r in [
            MarginRule::FileOnly,
            MarginRule::ToleranceFraction(0.25),
            MarginRule::ReferenceSd(1.5),
        ] {
            assert_eq!(MarginRule::from(MarginRuleRecord::from(r)), r);
        }
        let rule: MarginRuleRecord = serde_json::from_str("{\"reference_sd\": 2}").unwrap();
        assert_eq!(rule, MarginRuleRecord::ReferenceSd(2.0));
        assert_eq!(
            serde_json::to_string(&MarginRuleRecord::FileOnly).unwrap(),
            "\"file_only\""
        );
    }

    /// `null` reads back as NaN wherever a number may not exist.
    #[test]
    fn null_numbers_read_as_nan() {
        let c: ColumnSummaryRecord = serde_json::from_str(
            r#"{"n": 3, "mean": 1.5, "sd": 0.5, "min": null, "median": null, "max": null}"#,
        )
        .unwrap();
        assert!(c.median.is_nan() && c.min.is_nan() && c.max.is_nan());
        assert_eq!(c.mean, 1.5);
        let written = serde_json::to_string(&c).unwrap();
        assert!(written.contains("\"median\":null"), "{written}");
        let bad = serde_json::from_str::<ColumnSummaryRecord>(
            r#"{"n": 3, "mean": "x", "sd": 0.5, "min": 1, "median": 1, "max": 1}"#,
        );
        assert!(bad.is_err());
    }
}
