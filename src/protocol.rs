//! A comparison protocol: what a comparison will be, fixed before the data are seen — which
//! lots (files, or a file with a lot column and its two values), which characteristics,
//! alpha and every other setting, the specification and margins, and the description
//! (part, change request…). `compare --protocol FILE` runs exactly it; the window can load
//! one, which fixes its settings. Anything run otherwise is a **deviation**: it needs a
//! reason, and the record keeps each one with the protocol's SHA-256.
//!
//! The file is JSON, schema `lotshift.protocol/1`:
//!
//! ```json
//! {
//!   "schema": "lotshift.protocol/1",
//!   "title": "HX40 hub, route B first-article comparison",
//!   "lots": { "reference": "reference-route-a.csv", "candidate": "candidate-route-b.csv" },
//!   "characteristics": ["bore diameter", "outer diameter", "hub length"],
//!   "settings": { "alpha": 0.05, "permutations": 9999, "seed": 20261202 },
//!   "specification": { "file": "hub-spec.csv", "margin_fraction": 0.15 },
//!   "fields": [{ "name": "part", "value": "HX40 hub" }]
//! }
//! ```
//!
//! `lots` may instead be `{ "file": "both-routes.csv", "lot_column": "route", "values":
//! ["A", "B"] }`. File names are relative to the protocol's folder. `settings` takes any of
//! the record's `settings` keys; the rest keep their defaults.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use serde_json::Value;
use sha2::{Digest as _, Sha256};

use crate::analysis::Settings;
use crate::analysis::decision::MarginRule;
use crate::data::{self, LoadOptions, match_key};
use crate::pipeline::SpecRequest;
use crate::report::protocol_sign::{self, ProtocolSignatureError};
use crate::report::sign::SignatureBlock;
use crate::report::{Deviation, FieldRecord, ProtocolRecord};

/// Schema of a protocol file.
pub const PROTOCOL_SCHEMA: &str = "lotshift.protocol/1";

/// A protocol that cannot be used, with the file and the place in it.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ProtocolError {
    /// The file cannot be read.
    #[error("{file}: {message}")]
    Io {
        /// The protocol file.
        file: String,
        /// Why.
        message: String,
    },
    /// Not JSON, or not the protocol's keys.
    #[error("{file}: line {line}, column {column}: {message}")]
    Syntax {
        /// The protocol file.
        file: String,
        /// Line of the problem.
        line: usize,
        /// Column of the problem.
        column: usize,
        /// What serde found.
        message: String,
    },
    /// The signatures file beside it does not verify, or is of another version of it.
    #[error(
        "{0} (a protocol whose signatures do not hold is not used: to use a new version, move \
         the old signatures file aside and sign the new version)"
    )]
    Signatures(#[from] ProtocolSignatureError),
    /// Well-formed, but not a usable protocol.
    #[error("{file}: {message}")]
    Invalid {
        /// The protocol file.
        file: String,
        /// What is wrong, naming the key.
        message: String,
    },
}

/// The lots, as the protocol names them.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProtocolLots {
    /// The reference lot's file.
    #[serde(default)]
    pub reference: Option<String>,
    /// The candidate lot's file.
    #[serde(default)]
    pub candidate: Option<String>,
    /// One file holding both lots.
    #[serde(default)]
    pub file: Option<String>,
    /// Its lot column.
    #[serde(default)]
    pub lot_column: Option<String>,
    /// The lot column's values, reference first.
    #[serde(default)]
    pub values: Option<[String; 2]>,
    /// Sheet of a spreadsheet.
    #[serde(default)]
    pub sheet: Option<String>,
}

/// The specification and margins, as the protocol names them.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProtocolSpec {
    /// Specification file.
    #[serde(default)]
    pub file: Option<String>,
    /// Margin where the file gives none: this fraction of the tolerance width.
    #[serde(default)]
    pub margin_fraction: Option<f64>,
    /// Margin where the file gives none: this multiple of the reference lot's SD.
    #[serde(default)]
    pub margin_sd: Option<f64>,
    /// Margin on the Mahalanobis distance between the lot means.
    #[serde(default)]
    pub equivalence_distance: Option<f64>,
}

/// The protocol file's keys.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProtocolFile {
    /// Always [`PROTOCOL_SCHEMA`].
    pub schema: String,
    /// What the comparison is for, in a line.
    #[serde(default)]
    pub title: Option<String>,
    /// Which lots.
    pub lots: ProtocolLots,
    /// The characteristics compared, in order.
    pub characteristics: Vec<String>,
    /// Settings that differ from the defaults (keys of the record's `settings`).
    #[serde(default)]
    pub settings: serde_json::Map<String, Value>,
    /// Specification and margins.
    #[serde(default)]
    pub specification: Option<ProtocolSpec>,
    /// The comparison's description, as for `--field`.
    #[serde(default)]
    pub fields: Vec<FieldRecord>,
}

/// A protocol read and resolved: its files found, its settings complete.
#[derive(Debug, Clone, PartialEq)]
pub struct Protocol {
    /// The file as given.
    pub path: PathBuf,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Its keys.
    pub file: ProtocolFile,
    /// The complete settings (defaults where the protocol names none).
    pub settings: Settings,
    /// The specification and margins, the file read.
    pub spec: SpecRequest,
    /// The lot files, relative to the protocol's folder.
    pub lot_files: Vec<PathBuf>,
    /// Its signatures, from the signatures file beside it
    /// ([`crate::report::protocol_sign::signatures_path`]), every one checked; empty when it
    /// is not signed.
    pub signatures: Vec<SignatureBlock>,
}

fn invalid(path: &Path, message: impl Into<String>) -> ProtocolError {
    ProtocolError::Invalid {
        file: path.display().to_string(),
        message: message.into(),
    }
}

/// Reads a protocol file.
///
/// # Errors
/// The file cannot be read, is not JSON with the protocol's keys (line and column given),
/// names a setting lotshift does not have, names its lots incompletely, or names a
/// specification file that cannot be read.
pub fn load(path: &Path) -> Result<Protocol, ProtocolError> {
    let bytes = std::fs::read(path).map_err(|e| ProtocolError::Io {
        file: path.display().to_string(),
        message: e.to_string(),
    })?;
    let file: ProtocolFile = serde_json::from_slice(&bytes).map_err(|e| ProtocolError::Syntax {
        file: path.display().to_string(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    })?;
    if file.schema != PROTOCOL_SCHEMA {
        return Err(invalid(
            path,
            format!(
                "schema is \"{}\", expected \"{PROTOCOL_SCHEMA}\"",
                file.schema
            ),
        ));
    }
    if file.characteristics.is_empty() {
        return Err(invalid(path, "\"characteristics\" names none"));
    }
    let settings = resolve_settings(path, &file.settings)?;
    let folder = path.parent().unwrap_or(Path::new(""));
    let at = |f: &str| folder.join(f);
    let l = &file.lots;
    let lot_files = match (&l.reference, &l.candidate, &l.file) {
        (Some(r), Some(c), None) if l.lot_column.is_none() => vec![at(r), at(c)],
        (None, None, Some(f)) if l.lot_column.is_some() => vec![at(f)],
        _ => {
            return Err(invalid(
                path,
                "\"lots\" names either \"reference\" and \"candidate\" files, or one \"file\" \
                 with its \"lot_column\" (and \"values\")",
            ));
        }
    };
    let spec = match &file.specification {
        None => SpecRequest::default(),
        Some(s) => {
            let rule = match (s.margin_fraction, s.margin_sd) {
                (Some(_), Some(_)) => {
                    return Err(invalid(
                        path,
                        "\"specification\" gives both \"margin_fraction\" and \"margin_sd\"",
                    ));
                }
                (Some(f), None) => MarginRule::ToleranceFraction(f),
                (None, Some(k)) => MarginRule::ReferenceSd(k),
                (None, None) => MarginRule::FileOnly,
            };
            crate::analysis::decision::check_rule(rule)
                .map_err(|e| invalid(path, format!("\"specification\": {e}")))?;
            let spec_file = match &s.file {
                Some(f) => Some(
                    data::spec::load_spec(&at(f), &LoadOptions::default())
                        .map_err(|e| invalid(path, format!("\"specification\": {e}")))?,
                ),
                None => None,
            };
            SpecRequest {
                file: spec_file,
                rule,
                distance_margin: s.equivalence_distance,
                recorded: None,
            }
        }
    };
    let sha256 = data::hex(&Sha256::digest(&bytes));
    let beside = protocol_sign::signatures_path(path);
    let signatures = if beside.exists() {
        protocol_sign::read(&beside, &sha256)?.signatures
    } else {
        Vec::new()
    };
    Ok(Protocol {
        path: path.to_path_buf(),
        sha256,
        file,
        settings,
        spec,
        lot_files,
        signatures,
    })
}

/// The protocol's settings over the defaults; a key the settings do not have is an error.
fn resolve_settings(
    path: &Path,
    given: &serde_json::Map<String, Value>,
) -> Result<Settings, ProtocolError> {
    let Value::Object(mut all) = serde_json::to_value(Settings::default()).unwrap_or_default()
    else {
        return Err(invalid(path, "the settings cannot be read"));
    };
    for (k, v) in given {
        if !all.contains_key(k) {
            let known: Vec<&str> = all.keys().map(String::as_str).collect();
            return Err(invalid(
                path,
                format!(
                    "\"settings\" has no \"{k}\" (it takes {})",
                    known.join(", ")
                ),
            ));
        }
        all.insert(k.clone(), v.clone());
    }
    let s: Settings = serde_json::from_value(Value::Object(all))
        .map_err(|e| invalid(path, format!("\"settings\": {e}")))?;
    if !(s.alpha > 0.0 && s.alpha < 1.0) {
        return Err(invalid(
            path,
            format!(
                "\"settings\": alpha must lie between 0 and 1, got {}",
                s.alpha
            ),
        ));
    }
    Ok(s)
}

fn words(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        Value::Null => "none".into(),
        other => other.to_string(),
    }
}

fn rule_words(r: MarginRule) -> String {
    match r {
        MarginRule::FileOnly => "the file's margins only".into(),
        MarginRule::ToleranceFraction(f) => format!("margin fraction {f}"),
        MarginRule::ReferenceSd(k) => format!("margin {k} reference SD"),
    }
}

/// How a comparison about to run differs from its protocol: the characteristics compared (by
/// their match keys, in any order), each setting, the specification file (by SHA-256), the margin
/// rule and the distance margin, and the lot column and values of a file holding both lots.
/// Empty when it is run as fixed.
pub fn differences(
    p: &Protocol,
    compared: &[String],
    settings: &Settings,
    spec: &SpecRequest,
    lot_column: Option<(&str, [&str; 2])>,
) -> Vec<(String, String, String)> {
    let mut out = Vec::new();
    // The set compared matters, not the order it is listed in.
    let keys = |v: &[String]| {
        v.iter()
            .map(|s| match_key(s))
            .collect::<std::collections::BTreeSet<_>>()
    };
    if keys(&p.file.characteristics) != keys(compared) {
        out.push((
            "characteristics".to_string(),
            p.file.characteristics.join(", "),
            compared.join(", "),
        ));
    }
    if let (Ok(Value::Object(want)), Ok(Value::Object(got))) = (
        serde_json::to_value(&p.settings),
        serde_json::to_value(settings),
    ) {
        for (k, w) in &want {
            let g = got.get(k).cloned().unwrap_or(Value::Null);
            if &g != w {
                out.push((k.replace('_', " "), words(w), words(&g)));
            }
        }
    }
    let sha = |s: &SpecRequest| s.file.as_ref().map(|f| f.sha256.clone());
    if sha(&p.spec) != sha(spec) {
        let name = |s: &SpecRequest| {
            s.file.as_ref().map_or("none".to_string(), |f| {
                format!("{} (SHA-256 {}…)", f.file_name, &f.sha256[..12])
            })
        };
        out.push(("specification file".to_string(), name(&p.spec), name(spec)));
    }
    if p.spec.rule != spec.rule {
        out.push((
            "margin rule".to_string(),
            rule_words(p.spec.rule),
            rule_words(spec.rule),
        ));
    }
    if p.spec.distance_margin != spec.distance_margin {
        let d = |v: Option<f64>| v.map_or("none".to_string(), |x| x.to_string());
        out.push((
            "equivalence distance".to_string(),
            d(p.spec.distance_margin),
            d(spec.distance_margin),
        ));
    }
    let l = &p.file.lots;
    if let Some(column) = &l.lot_column {
        let want = format!(
            "{column}{}",
            l.values
                .as_ref()
                .map(|v| format!(" = {} (reference), {} (candidate)", v[0], v[1]))
                .unwrap_or_default()
        );
        let got = match lot_column {
            Some((c, v)) if l.values.is_some() => {
                format!("{c} = {} (reference), {} (candidate)", v[0], v[1])
            }
            Some((c, _)) => c.to_string(),
            None => "two lot files".to_string(),
        };
        if want != got {
            out.push(("lots".to_string(), want, got));
        }
    }
    out
}

/// The record's `protocol` section for a comparison run under `p` with these deviations.
pub fn record_section(p: &Protocol, deviations: Vec<Deviation>) -> ProtocolRecord {
    {
        ProtocolRecord {
            file: p.path.file_name().map_or_else(
                || p.path.display().to_string(),
                |n| n.to_string_lossy().into_owned(),
            ),
            sha256: p.sha256.clone(),
            title: p.file.title.clone(),
            deviations,
            signatures: p.signatures.clone(),
        }
    }
}
