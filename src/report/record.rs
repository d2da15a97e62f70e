//! The record every export and signed summary is built from (schema `lotshift.comparison/1`).

use serde::{Deserialize, Serialize};

use crate::analysis::decision::{CapabilityRow, Equivalence, InSpec, Outcome, Specification};
use crate::analysis::{
    CharacteristicResult, Comparison, Contribution, Discriminant, Favoured, HotellingResult,
    Interval, NormalityRow,
};
use crate::data::{ColumnData, Lot, Prepared, Unmatched};
use crate::stats::checks::{BoxM, Mardia, UnequalCovariance};
use crate::stats::permutation::PermutationResult;

/// Schema identifier written into every record.
pub const SCHEMA: &str = "lotshift.comparison/1";

/// The caution carried by every output.
pub const CAUTION: &str = "This statistical result supports, and does not replace, the lot \
disposition procedures of your quality system.";

/// Program that made the record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Software {
    /// Program name.
    pub name: String,
    /// Program version.
    pub version: String,
}

/// One lot in the record: where it came from and its statistics.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LotRecord {
    /// Display name.
    pub name: String,
    /// File name (absent for summary input typed in by hand).
    pub file: Option<String>,
    /// SHA-256 of the file's bytes.
    pub sha256: Option<String>,
    /// File size in bytes.
    pub size_bytes: Option<u64>,
    /// Sheet read from a spreadsheet.
    pub sheet: Option<String>,
    /// Lot column and value for a split file.
    pub split: Option<(String, String)>,
    /// Columns read as labels on request.
    pub forced_labels: Vec<String>,
    /// Units compared.
    pub n: usize,
    /// Units read.
    pub n_read: usize,
    /// Units left out for missing cells.
    pub n_excluded: usize,
    /// Missing cells per characteristic.
    pub missing: Vec<usize>,
    /// Mean vector.
    pub mean: Vec<f64>,
    /// Unbiased covariance matrix.
    pub covariance: Vec<Vec<f64>>,
}

/// A flagged outlier, located in its file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutlierRecord {
    /// Lot index (0 reference, 1 candidate).
    pub lot: usize,
    /// Row as a spreadsheet shows it.
    pub row: Option<u32>,
    /// The unit's label columns, `[header, value]`.
    pub labels: Vec<(String, String)>,
    /// Squared Mahalanobis distance from its lot's mean.
    pub d2: f64,
    /// Beta reference tail probability.
    pub p_value: f64,
}

/// The outlier screen in the record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutlierSection {
    /// Cutoff on d² per lot.
    pub cutoff: [f64; 2],
    /// Flagged units (all of them; largest distance first per lot).
    pub units: Vec<OutlierRecord>,
}

/// The comparison record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Record {
    /// Always [`SCHEMA`].
    pub schema: String,
    /// Program and version.
    pub software: Software,
    /// When the comparison was made (RFC 3339, UTC), set by the program that ran it.
    pub analysed_at: Option<String>,
    /// Everything the comparison was computed with (alpha, checks, permutations, seed).
    pub settings: crate::analysis::Settings,
    /// Significance level.
    pub alpha: f64,
    /// Compared characteristics.
    pub characteristics: Vec<String>,
    /// Their units.
    pub units: Vec<Option<String>>,
    /// The two lots, reference first.
    pub lots: Vec<LotRecord>,
    /// Columns not compared, and why.
    pub unmatched: Vec<Unmatched>,
    /// Hotelling's two-sample test.
    pub hotelling: HotellingResult,
    /// Follow-up intervals.
    pub intervals: Vec<Interval>,
    /// Discriminant direction.
    pub discriminant: Discriminant,
    /// Characteristics by how much each drives the shift.
    pub ranking: Vec<Contribution>,
    /// Per-characteristic summaries and univariate tests.
    pub per_characteristic: Vec<CharacteristicResult>,
    /// Pooled covariance.
    pub pooled_covariance: Vec<Vec<f64>>,
    /// Condition number of the pooled correlation matrix.
    pub condition_number: f64,
    /// Box's M test of equal covariance matrices.
    pub box_m: Option<BoxM>,
    /// Mardia's multivariate skewness and kurtosis per lot.
    pub mardia: Vec<Mardia>,
    /// Shapiro–Wilk per characteristic and lot.
    pub normality: Vec<NormalityRow>,
    /// Outlier screen.
    pub outliers: Option<OutlierSection>,
    /// Krishnamoorthy–Yu test for unequal covariance matrices.
    pub unequal_covariance: Option<UnequalCovariance>,
    /// Permutation p-value.
    pub permutation: Option<PermutationResult>,
    /// Which test the checks favour, and why.
    pub favoured: Favoured,
    /// The result in plain words.
    pub verdict: String,
    /// Cautions about this result.
    pub warnings: Vec<String>,
    /// The result supports, and does not replace, the quality system's lot disposition.
    pub caution: String,
    /// Specification limits and margins compared against (null without a specification).
    #[serde(default)]
    pub specification: Option<Specification>,
    /// Equivalence tests (null without margins).
    #[serde(default)]
    pub equivalence: Option<Equivalence>,
    /// Capability of the characteristics with limits (empty without limits).
    #[serde(default)]
    pub capability: Vec<CapabilityRow>,
    /// Fraction of units inside every limit at once (null without limits).
    #[serde(default)]
    pub in_spec: Option<InSpec>,
    /// Four-way outcome of the difference and equivalence tests (null without margins).
    #[serde(default)]
    pub outcome: Option<Outcome>,
    /// Units set aside before the comparison, each with its row, labels and reason.
    #[serde(default)]
    pub exclusions: Vec<crate::data::exclusions::Exclusion>,
}

impl Record {
    /// Builds the record of a comparison; `inputs` are the prepared unit data and the lots as
    /// read (absent for summary-statistics input).
    pub fn new(c: &Comparison, inputs: Option<(&Prepared, [&Lot; 2])>) -> Self {
        let prepared = inputs.map(|(p, _)| p);
        let lots = (0..2)
            .map(|i| {
                let lot = &c.lots[i];
                let src = inputs.map(|(_, l)| &l[i].provenance);
                let prep = prepared.map(|p| &p.lots[i]);
                LotRecord {
                    name: lot.name.clone(),
                    file: src.map(|s| s.file_name.clone()),
                    sha256: src.map(|s| s.sha256.clone()),
                    size_bytes: src.map(|s| s.size_bytes),
                    sheet: src.and_then(|s| s.sheet.clone()),
                    split: src.and_then(|s| s.split.clone()),
                    forced_labels: src.map(|s| s.forced_labels.clone()).unwrap_or_default(),
                    n: lot.n,
                    n_read: prep.map_or(lot.n, |p| p.n_read),
                    n_excluded: prep.map_or(0, |p| p.n_excluded),
                    missing: prep
                        .map_or_else(|| vec![0; c.characteristics.len()], |p| p.missing.clone()),
                    mean: lot.mean.clone(),
                    covariance: lot.covariance.clone(),
                }
            })
            .collect();
        let outliers = c.outliers.as_ref().map(|o| OutlierSection {
            cutoff: o.cutoff,
            units: o
                .units
                .iter()
                .map(|u| {
                    let located = inputs.and_then(|(p, l)| {
                        let k = *p.lots[u.lot].kept.get(u.unit)?;
                        let lot = l[u.lot];
                        let labels = lot
                            .columns
                            .iter()
                            .filter_map(|col| match &col.data {
                                ColumnData::Text(t) => {
                                    Some((col.header.clone(), t.get(k).to_string()))
                                }
                                ColumnData::Numeric(_) => None,
                            })
                            .collect();
                        Some((lot.rows.get(k).copied(), labels))
                    });
                    let (row, labels) = located.unwrap_or((None, Vec::new()));
                    OutlierRecord {
                        lot: u.lot,
                        row,
                        labels,
                        d2: u.d2,
                        p_value: u.p_value,
                    }
                })
                .collect(),
        });
        Record {
            schema: SCHEMA.into(),
            software: Software {
                name: env!("CARGO_PKG_NAME").into(),
                version: env!("CARGO_PKG_VERSION").into(),
            },
            analysed_at: None,
            settings: c.settings.clone(),
            alpha: c.alpha,
            characteristics: c.characteristics.clone(),
            units: c.units.clone(),
            lots,
            unmatched: prepared.map(|p| p.unmatched.clone()).unwrap_or_default(),
            hotelling: c.hotelling.clone(),
            intervals: c.intervals.clone(),
            discriminant: c.discriminant.clone(),
            ranking: c.ranking.clone(),
            per_characteristic: c.per_characteristic.clone(),
            pooled_covariance: c.pooled_covariance.clone(),
            condition_number: c.condition_number,
            box_m: c.box_m.clone(),
            mardia: c.mardia.clone(),
            normality: c.normality.clone(),
            outliers,
            unequal_covariance: c.unequal_covariance.clone(),
            permutation: c.permutation.clone(),
            favoured: c.favoured.clone(),
            verdict: c.verdict.clone(),
            warnings: c.warnings.clone(),
            caution: CAUTION.into(),
            specification: c.decision.as_ref().map(|d| d.specification.clone()),
            equivalence: c.decision.as_ref().and_then(|d| d.equivalence.clone()),
            capability: c
                .decision
                .as_ref()
                .map(|d| d.capability.clone())
                .unwrap_or_default(),
            in_spec: c.decision.as_ref().and_then(|d| d.in_spec.clone()),
            outcome: c.decision.as_ref().and_then(|d| d.outcome),
            exclusions: prepared.map(|p| p.exclusions.clone()).unwrap_or_default(),
        }
    }

    /// Pretty JSON with full f64 round-trip precision.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }
}
