//! The record every export and signed summary is built from (schema `lotshift.comparison/1`).

use serde::{Deserialize, Serialize};

use crate::analysis::{
    CharacteristicResult, Comparison, Contribution, Discriminant, HotellingResult, Interval,
};
use crate::data::{Prepared, Provenance, Unmatched};

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

/// The comparison record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Record {
    /// Always [`SCHEMA`].
    pub schema: String,
    /// Program and version.
    pub software: Software,
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
    /// The result in plain words.
    pub verdict: String,
    /// Cautions about this result.
    pub warnings: Vec<String>,
    /// The result supports, and does not replace, the quality system's lot disposition.
    pub caution: String,
}

impl Record {
    /// Builds the record of a comparison of unit data.
    pub fn new(
        c: &Comparison,
        prepared: Option<&Prepared>,
        sources: [Option<&Provenance>; 2],
    ) -> Self {
        let lots = (0..2)
            .map(|i| {
                let lot = &c.lots[i];
                let src = sources[i];
                let prep = prepared.map(|p| &p.lots[i]);
                LotRecord {
                    name: lot.name.clone(),
                    file: src.map(|s| s.file_name.clone()),
                    sha256: src.map(|s| s.sha256.clone()),
                    size_bytes: src.map(|s| s.size_bytes),
                    sheet: src.and_then(|s| s.sheet.clone()),
                    split: src.and_then(|s| s.split.clone()),
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
        Record {
            schema: SCHEMA.into(),
            software: Software {
                name: env!("CARGO_PKG_NAME").into(),
                version: env!("CARGO_PKG_VERSION").into(),
            },
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
            verdict: c.verdict.clone(),
            warnings: c.warnings.clone(),
            caution: CAUTION.into(),
        }
    }

    /// Pretty JSON with full f64 round-trip precision.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }
}
