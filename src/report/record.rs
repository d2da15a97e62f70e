//! The record every export and signed summary is built from (schema `lotshift.comparison/2`:
//! every difference is candidate − reference; `/1` wrote reference − candidate).

//!
//! Every key is a field of a type of the report layer (this file and [`super::sections`]),
//! converted from the engine's types; the engine's field names never reach the record.

use serde::{Deserialize, Serialize};

use super::sections::{
    BoxMRecord, CapabilityRecord, CharacteristicRecord, DiscriminantRecord, EquivalenceRecord,
    ExclusionRecord, FavouredRecord, HotellingRecord, InSpecRecord, IntervalRecord, MardiaRecord,
    NormalityRecord, OutcomeRecord, PermutationRecord, RankingRecord, SettingsRecord,
    SpecificationRecord, UnequalCovarianceRecord, UnmatchedRecord, nan,
};
use crate::analysis::decision::Decision;
use crate::analysis::{Comparison, LotResult};
use crate::data::{ColumnData, Lot, Prepared};

/// Schema identifier written into every record.
pub const SCHEMA: &str = "lotshift.comparison/2";

/// The earlier schema, whose differences were reference − candidate; `verify` still verifies
/// summaries of it (see [`crate::analysis::Comparison::reference_minus_candidate`]).
pub const SCHEMA_V1: &str = "lotshift.comparison/1";

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
    #[serde(deserialize_with = "nan::de")]
    pub mean: Vec<f64>,
    /// Unbiased covariance matrix.
    #[serde(deserialize_with = "nan::de")]
    pub covariance: Vec<Vec<f64>>,
    /// Units left out for a missing cell, each with its row, labels and the characteristics
    /// missing.
    #[serde(default)]
    pub left_out: Vec<LeftOutRecord>,
    /// The database the lot was read from (null for a file).
    #[serde(default)]
    pub source: Option<SourceRecord>,
}

/// `lots[].source`: a lot read from a database query.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SourceRecord {
    /// `sqlite` or `postgresql`.
    pub kind: String,
    /// The database URL (never with a password).
    pub url: String,
    /// The query, as given.
    pub query: String,
    /// The lot column.
    pub lot_column: String,
    /// This lot's value in it.
    pub lot_value: String,
    /// Rows of the result with this lot value.
    pub rows_read: usize,
    /// SHA-256 of those rows' canonical stream ([`crate::source::rows_sha256`]); null when
    /// the comparison was computed inside the database, where no row leaves it.
    pub rows_sha256: Option<String>,
    /// The comparison was computed inside the database from aggregate statements.
    pub in_database: bool,
}

/// A unit left out for a missing cell (record key `lots[].left_out`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LeftOutRecord {
    /// Row of the lot file, as a spreadsheet shows it.
    pub row: u32,
    /// The unit's labels, `[header, value]`.
    pub labels: Vec<(String, String)>,
    /// The compared characteristics whose cell is missing.
    pub missing: Vec<String>,
}

/// Two columns paired although written differently (record key `pairings`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairingRecord {
    /// The reference lot's header.
    pub reference: String,
    /// The candidate lot's header.
    pub candidate: String,
}

/// The shift detectable with the stated power (record key `detectable`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DetectableRecord {
    /// Power.
    pub power: f64,
    /// Mahalanobis distance of the shift.
    pub distance: f64,
    /// That shift along the observed direction, in each characteristic's pooled SD.
    #[serde(deserialize_with = "nan::de")]
    pub per_characteristic_sd: Vec<f64>,
}

/// The T² test without the flagged outliers (record key `without_outliers`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WithoutOutliersRecord {
    /// Units left out per lot.
    pub removed: [usize; 2],
    /// T² without them.
    pub t2: f64,
    /// Its p-value.
    pub p_value: f64,
    /// The lots differ without them.
    pub differ: bool,
    /// The decision is the same with and without them.
    pub same_decision: bool,
}

impl From<&crate::analysis::Detectable> for DetectableRecord {
    fn from(d: &crate::analysis::Detectable) -> Self {
        let crate::analysis::Detectable {
            power,
            distance,
            per_characteristic_sd,
        } = d;
        DetectableRecord {
            power: *power,
            distance: *distance,
            per_characteristic_sd: per_characteristic_sd.clone(),
        }
    }
}

impl From<&DetectableRecord> for crate::analysis::Detectable {
    fn from(d: &DetectableRecord) -> Self {
        crate::analysis::Detectable {
            power: d.power,
            distance: d.distance,
            per_characteristic_sd: d.per_characteristic_sd.clone(),
        }
    }
}

impl From<&crate::analysis::WithoutOutliers> for WithoutOutliersRecord {
    fn from(w: &crate::analysis::WithoutOutliers) -> Self {
        let crate::analysis::WithoutOutliers {
            removed,
            t2,
            p_value,
            differ,
            same_decision,
        } = w;
        WithoutOutliersRecord {
            removed: *removed,
            t2: *t2,
            p_value: *p_value,
            differ: *differ,
            same_decision: *same_decision,
        }
    }
}

impl From<&WithoutOutliersRecord> for crate::analysis::WithoutOutliers {
    fn from(w: &WithoutOutliersRecord) -> Self {
        crate::analysis::WithoutOutliers {
            removed: w.removed,
            t2: w.t2,
            p_value: w.p_value,
            differ: w.differ,
            same_decision: w.same_decision,
        }
    }
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
    #[serde(deserialize_with = "nan::de")]
    pub d2: f64,
    /// Beta reference tail probability.
    #[serde(deserialize_with = "nan::de")]
    pub p_value: f64,
}

/// The outlier screen in the record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutlierSection {
    /// Cutoff on d² per lot.
    #[serde(deserialize_with = "nan::de")]
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
    pub settings: SettingsRecord,
    /// Significance level.
    #[serde(deserialize_with = "nan::de")]
    pub alpha: f64,
    /// Compared characteristics.
    pub characteristics: Vec<String>,
    /// Their units.
    pub units: Vec<Option<String>>,
    /// The two lots, reference first.
    pub lots: Vec<LotRecord>,
    /// Columns not compared, and why.
    pub unmatched: Vec<UnmatchedRecord>,
    /// Hotelling's two-sample test.
    pub hotelling: HotellingRecord,
    /// Follow-up intervals.
    pub intervals: Vec<IntervalRecord>,
    /// Discriminant direction.
    pub discriminant: DiscriminantRecord,
    /// Characteristics by how much each drives the shift.
    pub ranking: Vec<RankingRecord>,
    /// Per-characteristic summaries and univariate tests.
    pub per_characteristic: Vec<CharacteristicRecord>,
    /// Pooled covariance.
    #[serde(deserialize_with = "nan::de")]
    pub pooled_covariance: Vec<Vec<f64>>,
    /// Condition number of the pooled correlation matrix.
    #[serde(deserialize_with = "nan::de")]
    pub condition_number: f64,
    /// Box's M test of equal covariance matrices.
    pub box_m: Option<BoxMRecord>,
    /// Mardia's multivariate skewness and kurtosis per lot.
    pub mardia: Vec<MardiaRecord>,
    /// Shapiro–Wilk per characteristic and lot.
    pub normality: Vec<NormalityRecord>,
    /// Outlier screen.
    pub outliers: Option<OutlierSection>,
    /// Krishnamoorthy–Yu test for unequal covariance matrices.
    pub unequal_covariance: Option<UnequalCovarianceRecord>,
    /// Permutation p-value.
    pub permutation: Option<PermutationRecord>,
    /// Which test the checks favour, and why.
    pub favoured: FavouredRecord,
    /// The result in plain words.
    pub verdict: String,
    /// Cautions about this result.
    pub warnings: Vec<String>,
    /// The result supports, and does not replace, the quality system's lot disposition.
    pub caution: String,
    /// Specification limits and margins compared against (null without a specification).
    #[serde(default)]
    pub specification: Option<SpecificationRecord>,
    /// Equivalence tests (null without margins).
    #[serde(default)]
    pub equivalence: Option<EquivalenceRecord>,
    /// Capability of the characteristics with limits (empty without limits).
    #[serde(default)]
    pub capability: Vec<CapabilityRecord>,
    /// Fraction of units inside every limit at once (null without limits).
    #[serde(default)]
    pub in_spec: Option<InSpecRecord>,
    /// Four-way outcome of the difference and equivalence tests (null without margins).
    #[serde(default)]
    pub outcome: Option<OutcomeRecord>,
    /// Units set aside before the comparison, each with its row, labels and reason.
    #[serde(default)]
    pub exclusions: Vec<ExclusionRecord>,
    /// Numeric columns the lots did not line up on, as `"header" (lot N: why)`.
    #[serde(default)]
    pub not_compared: Vec<String>,
    /// Compared columns whose headers are written differently in the two lots.
    #[serde(default)]
    pub pairings: Vec<PairingRecord>,
    /// The shift these lot sizes detect with 80% power.
    #[serde(default)]
    pub detectable: Option<DetectableRecord>,
    /// The T² test without the units flagged as outliers.
    #[serde(default)]
    pub without_outliers: Option<WithoutOutliersRecord>,
    /// What the comparison is about, as entered (part, lot identifiers, change request,
    /// purpose, notes): printed in the report, covered by the signature, not recomputed.
    #[serde(default)]
    pub fields: Vec<FieldRecord>,
    /// The protocol the comparison was run under, with every deviation and its reason (null
    /// without a protocol).
    #[serde(default)]
    pub protocol: Option<ProtocolRecord>,
    /// The window's audit trail: the runs made on these lot files up to this one, and the
    /// hash of this one's entry (null for a record made on the command line).
    #[serde(default)]
    pub audit_trail: Option<AuditRecord>,
    /// Computed inside a database: what was not computed that way, and the units beyond the
    /// outlier cutoff with their labels (null otherwise).
    #[serde(default)]
    pub in_database: Option<crate::analysis::InDatabase>,
}

/// `audit_trail`: what the audit trail holds of this comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AuditRecord {
    /// The trail file.
    pub file: String,
    /// Hash of the entry of the run this record is of.
    pub final_hash: String,
    /// The runs on these lot files, in order, the last one this record's.
    pub runs: Vec<AuditRun>,
}

/// `audit_trail.runs[]`: one run as the trail holds it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AuditRun {
    /// Position in the trail.
    pub seq: u64,
    /// When (RFC 3339, UTC).
    pub at: String,
    /// The characteristics compared.
    pub characteristics: Vec<String>,
    /// The settings.
    pub settings: serde_json::Value,
    /// The result in a line.
    pub headline: String,
    /// The entry's hash.
    pub hash: String,
}

/// One way a comparison differs from its protocol.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Deviation {
    /// What differs ("alpha", "characteristics", "specification file", …).
    pub what: String,
    /// As the protocol fixes it.
    pub protocol: String,
    /// As run.
    pub used: String,
    /// Why, as the person who ran it gave it.
    pub reason: String,
}

impl Deviation {
    /// "alpha: 0.01 (protocol: 0.05)".
    pub fn describe(&self) -> String {
        format!("{}: {} (protocol: {})", self.what, self.used, self.protocol)
    }
}

/// The record's `protocol` section: which protocol, and every deviation with its reason.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ProtocolRecord {
    /// The protocol file's name.
    pub file: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Its title.
    pub title: Option<String>,
    /// How the comparison differs from it, each with the reason given.
    pub deviations: Vec<Deviation>,
    /// The protocol's signatures (authorship, review, approval) as they were when the
    /// comparison ran, each over the protocol's SHA-256 and every earlier signature (empty:
    /// the protocol is not signed; absent from records made before protocols were signed).
    #[serde(default)]
    pub signatures: Vec<super::sign::SignatureBlock>,
}

/// `fields[]`: one entry of the comparison's description, as entered.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct FieldRecord {
    /// What it is ("part", "reference lot", "change request", …).
    pub name: String,
    /// As entered.
    pub value: String,
}

/// The entry fields the window's form offers and the report prints first, in this order
/// (`--field` takes these and any other name).
pub const STANDARD_FIELDS: [&str; 6] = [
    "part",
    "reference lot",
    "candidate lot",
    "change request",
    "purpose",
    "notes",
];

/// Parses `--field NAME=VALUE`.
///
/// # Errors
/// No `=`, or an empty name or value, in words.
pub fn parse_field(s: &str) -> Result<FieldRecord, String> {
    let Some((name, value)) = s.split_once('=') else {
        return Err(format!(
            "--field takes NAME=VALUE (for example --field \"part=HX40 hub\"), got \"{s}\""
        ));
    };
    let (name, value) = (name.trim(), value.trim());
    if name.is_empty() || value.is_empty() {
        return Err(format!(
            "--field \"{s}\": both the name and the value must be given"
        ));
    }
    Ok(FieldRecord {
        name: name.to_string(),
        value: value.to_string(),
    })
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
                    left_out: prep
                        .map(|p| {
                            p.left_out
                                .iter()
                                .map(|u| LeftOutRecord {
                                    row: u.row,
                                    labels: u.labels.clone(),
                                    missing: u.missing.clone(),
                                })
                                .collect()
                        })
                        .unwrap_or_default(),
                    source: src.and_then(|s| {
                        let query = s.query.clone()?;
                        let (lot_column, lot_value) = s.split.clone().unwrap_or_default();
                        Some(SourceRecord {
                            kind: s.format.clone(),
                            url: s.path.clone(),
                            query,
                            lot_column,
                            lot_value,
                            rows_read: s.rows_read,
                            rows_sha256: Some(s.sha256.clone()),
                            in_database: false,
                        })
                    }),
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
            settings: (&c.settings).into(),
            alpha: c.alpha(),
            characteristics: c.characteristics.clone(),
            units: c.units.clone(),
            lots,
            unmatched: prepared
                .map(|p| p.unmatched.iter().map(Into::into).collect())
                .unwrap_or_default(),
            hotelling: (&c.hotelling).into(),
            intervals: c.intervals.iter().map(Into::into).collect(),
            discriminant: (&c.discriminant).into(),
            ranking: c.ranking.iter().map(Into::into).collect(),
            per_characteristic: c.per_characteristic.iter().map(Into::into).collect(),
            pooled_covariance: c.pooled_covariance.clone(),
            condition_number: c.condition_number,
            box_m: c.box_m.as_ref().map(Into::into),
            mardia: c.mardia.iter().map(Into::into).collect(),
            normality: c.normality.iter().map(Into::into).collect(),
            outliers,
            unequal_covariance: c.unequal_covariance.as_ref().map(Into::into),
            permutation: c.permutation.as_ref().map(Into::into),
            favoured: (&c.favoured).into(),
            verdict: c.verdict.clone(),
            warnings: c.warnings.clone(),
            caution: CAUTION.into(),
            specification: c.decision.as_ref().map(|d| (&d.specification).into()),
            equivalence: c
                .decision
                .as_ref()
                .and_then(|d| d.equivalence.as_ref().map(Into::into)),
            capability: c
                .decision
                .as_ref()
                .map(|d| d.capability.iter().map(Into::into).collect())
                .unwrap_or_default(),
            in_spec: c
                .decision
                .as_ref()
                .and_then(|d| d.in_spec.as_ref().map(Into::into)),
            outcome: c.decision.as_ref().and_then(|d| d.outcome.map(Into::into)),
            exclusions: prepared
                .map(|p| p.exclusions.iter().map(Into::into).collect())
                .unwrap_or_default(),
            not_compared: c.not_compared.clone(),
            pairings: prepared
                .map(|p| {
                    p.pairings
                        .iter()
                        .map(|m| PairingRecord {
                            reference: m.reference.clone(),
                            candidate: m.candidate.clone(),
                        })
                        .collect()
                })
                .unwrap_or_default(),
            detectable: c.detectable.as_ref().map(Into::into),
            without_outliers: c.without_outliers.as_ref().map(Into::into),
            fields: Vec::new(),
            protocol: None,
            audit_trail: None,
            in_database: c.in_database.clone(),
        }
    }

    /// The comparison as far as the record holds it, for the engine's functions that read a
    /// [`Comparison`] (the HTML report draws its pair chart with
    /// [`crate::analysis::pair_geometry`], as the window does). Every number is the record's.
    /// What the record does not hold is left empty: the outlier screen (the record locates
    /// the flagged units in their files, not among the compared units), the discriminant's
    /// unit scores, the decision's notes and units-needed estimate, the input notes, the
    /// detectable shift and the rerun without outliers. `None` unless the record describes
    /// exactly two lots.
    pub fn comparison(&self) -> Option<Comparison> {
        let lot = |l: &LotRecord| LotResult {
            name: l.name.clone(),
            n: l.n,
            mean: l.mean.clone(),
            covariance: l.covariance.clone(),
        };
        let [l0, l1] = self.lots.as_slice() else {
            return None;
        };
        Some(Comparison {
            settings: (&self.settings).into(),
            characteristics: self.characteristics.clone(),
            units: self.units.clone(),
            lots: [lot(l0), lot(l1)],
            pooled_covariance: self.pooled_covariance.clone(),
            condition_number: self.condition_number,
            hotelling: (&self.hotelling).into(),
            intervals: self.intervals.iter().map(Into::into).collect(),
            discriminant: (&self.discriminant).into(),
            ranking: self.ranking.iter().map(Into::into).collect(),
            per_characteristic: self.per_characteristic.iter().map(Into::into).collect(),
            box_m: self.box_m.as_ref().map(Into::into),
            mardia: self.mardia.iter().map(Into::into).collect(),
            normality: self.normality.iter().map(Into::into).collect(),
            outliers: None,
            unequal_covariance: self.unequal_covariance.as_ref().map(Into::into),
            permutation: self.permutation.as_ref().map(Into::into),
            favoured: (&self.favoured).into(),
            verdict: self.verdict.clone(),
            warnings: self.warnings.clone(),
            decision: self.specification.as_ref().map(|s| Decision {
                specification: s.into(),
                equivalence: self.equivalence.as_ref().map(Into::into),
                capability: self.capability.iter().map(Into::into).collect(),
                in_spec: self.in_spec.as_ref().map(Into::into),
                outcome: self.outcome.map(Into::into),
                units_needed: None,
                notes: Vec::new(),
            }),
            not_compared: self.not_compared.clone(),
            input_alerts: Vec::new(),
            detectable: self.detectable.as_ref().map(Into::into),
            without_outliers: self.without_outliers.as_ref().map(Into::into),
            in_database: self.in_database.clone(),
        })
    }

    /// Pretty JSON with full f64 round-trip precision.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }
}
