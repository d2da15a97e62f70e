//! Signed comparison summaries: an Ed25519 signature over the RFC 8785 canonical bytes of the
//! comparison record together with the signature manifestation (printed name, time of signing
//! in UTC, meaning), so that a reviewer can check who signed what, when and why, and that
//! nothing changed since (compare 21 CFR Part 11, §11.50 and §11.70).
//!
//! The document is `{schema, record, signature: {signer, signed_at, meaning, algorithm,
//! canonicalization, public_key, key_fingerprint, value}}`; `value` signs the canonical bytes
//! of the whole document with `value` left out.
//!
//! One job, kept in one file: the signed summary's keys, signing and verifying share the canonical bytes and must change together.

use std::path::{Path, PathBuf};

use ed25519_dalek::pkcs8::{
    DecodePrivateKey as _, DecodePublicKey as _, EncodePrivateKey as _, EncodePublicKey as _,
};
use ed25519_dalek::{Signature, Signer as _, SigningKey, Verifier as _, VerifyingKey};
use serde::{Deserialize, Serialize};
use serde_json::Value;
use sha2::{Digest as _, Sha256};

use super::canonical::canonical_bytes;
use super::{Record, write_atomic};
use crate::data::hex;

/// Schema of a signed summary.
pub const SIGNED_SCHEMA: &str = "lotshift.signed-summary/1";

/// What a signature means.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Meaning {
    /// The signer reviewed the comparison.
    Review,
    /// The signer approves it.
    Approval,
    /// The signer made it.
    Authorship,
}

impl Meaning {
    /// Parses `review`, `approval` or `authorship`.
    pub fn parse(s: &str) -> Option<Meaning> {
        match s.to_ascii_lowercase().as_str() {
            "review" => Some(Meaning::Review),
            "approval" => Some(Meaning::Approval),
            "authorship" => Some(Meaning::Authorship),
            _ => None,
        }
    }

    /// The word written into the summary.
    pub fn as_str(self) -> &'static str {
        match self {
            Meaning::Review => "review",
            Meaning::Approval => "approval",
            Meaning::Authorship => "authorship",
        }
    }
}

impl std::fmt::Display for Meaning {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The signature manifestation and the signature.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SignatureBlock {
    /// Printed name of the signer.
    pub signer: String,
    /// Date and time of signing, RFC 3339 UTC.
    pub signed_at: String,
    /// What the signature means.
    pub meaning: Meaning,
    /// Always `Ed25519`.
    pub algorithm: String,
    /// Always `RFC 8785`.
    pub canonicalization: String,
    /// The signer's public key: 32 bytes, hex.
    pub public_key: String,
    /// `SHA256:` and the hex SHA-256 of the public key bytes.
    pub key_fingerprint: String,
    /// The signature: 64 bytes, hex.
    pub value: String,
}

/// A signed comparison summary.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SignedSummary {
    /// Always [`SIGNED_SCHEMA`].
    pub schema: String,
    /// The comparison record.
    pub record: Value,
    /// Signature block.
    pub signature: SignatureBlock,
}

/// A signing problem.
#[derive(Debug, thiserror::Error)]
pub enum SignError {
    /// Reading or writing a key or summary failed.
    #[error("{0}")]
    Io(String),
    /// The key file is not an Ed25519 key lotshift can read.
    #[error("{path}: not an Ed25519 key in PKCS#8 PEM form ({why})")]
    Key {
        /// The file.
        path: String,
        /// The parser's reason.
        why: String,
    },
    /// The record could not be canonicalized.
    #[error("the record cannot be signed: {0}")]
    Canonical(String),
    /// A key file already exists.
    #[error("{0} already exists; lotshift never overwrites a key")]
    Exists(String),
}

/// `SHA256:` + hex SHA-256 of the public key bytes.
pub fn fingerprint(key: &VerifyingKey) -> String {
    format!("SHA256:{}", hex(&Sha256::digest(key.as_bytes())))
}

/// Current time as RFC 3339 UTC with seconds (`2026-12-02T03:30:00Z`).
pub fn now_rfc3339() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    rfc3339_from_unix(secs)
}

/// RFC 3339 UTC for seconds since 1970 (civil-from-days, H. Hinnant's algorithm).
pub fn rfc3339_from_unix(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        (rem / 60) % 60,
        rem % 60
    )
}

/// Paths of a key's public half and signer file next to the private key `KEY.pem`.
pub fn key_companions(private: &Path) -> (PathBuf, PathBuf) {
    let stem = private.with_extension("");
    (
        PathBuf::from(format!("{}.pub.pem", stem.display())),
        PathBuf::from(format!("{}.signer.json", stem.display())),
    )
}

/// Who a key belongs to (written beside it by [`keygen`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SignerFile {
    /// Printed name.
    pub signer: String,
    /// Key fingerprint.
    pub key_fingerprint: String,
    /// When the key was made.
    pub created_at: String,
}

/// Makes a new Ed25519 key pair in `dir`: `NAME.pem` (private, PKCS#8 PEM, mode 0600),
/// `NAME.pub.pem` and `NAME.signer.json`. Never overwrites. Returns the private key path.
///
/// # Errors
/// Existing files, I/O errors, or no randomness from the system.
pub fn keygen(dir: &Path, name: &str, signer: &str) -> Result<PathBuf, SignError> {
    let private = dir.join(format!("{name}.pem"));
    let (public, signer_path) = key_companions(&private);
    for p in [&private, &public, &signer_path] {
        if p.exists() {
            return Err(SignError::Exists(p.display().to_string()));
        }
    }
    std::fs::create_dir_all(dir).map_err(|e| SignError::Io(format!("{}: {e}", dir.display())))?;
    let mut seed = [0u8; 32];
    getrandom::fill(&mut seed)
        .map_err(|e| SignError::Io(format!("no randomness from the system: {e}")))?;
    let key = SigningKey::from_bytes(&seed);
    seed.fill(0);
    let pem = key
        .to_pkcs8_pem(Default::default())
        .map_err(|e| SignError::Io(e.to_string()))?;
    write_private(&private, pem.as_bytes())?;
    let vk = key.verifying_key();
    let pub_pem = vk
        .to_public_key_pem(Default::default())
        .map_err(|e| SignError::Io(e.to_string()))?;
    write_atomic(&public, pub_pem.as_bytes()).map_err(|e| SignError::Io(e.to_string()))?;
    let info = SignerFile {
        signer: signer.to_string(),
        key_fingerprint: fingerprint(&vk),
        created_at: now_rfc3339(),
    };
    let text = serde_json::to_string_pretty(&info).map_err(|e| SignError::Io(e.to_string()))?;
    write_atomic(&signer_path, text.as_bytes()).map_err(|e| SignError::Io(e.to_string()))?;
    Ok(private)
}

#[cfg(unix)]
fn write_private(path: &Path, bytes: &[u8]) -> Result<(), SignError> {
    use std::io::Write as _;
    use std::os::unix::fs::OpenOptionsExt as _;
    let mut f = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .mode(0o600)
        .open(path)
        .map_err(|e| SignError::Io(format!("{}: {e}", path.display())))?;
    f.write_all(bytes)
        .and_then(|()| f.sync_all())
        .map_err(|e| SignError::Io(format!("{}: {e}", path.display())))
}

#[cfg(not(unix))]
fn write_private(path: &Path, bytes: &[u8]) -> Result<(), SignError> {
    std::fs::write(path, bytes).map_err(|e| SignError::Io(format!("{}: {e}", path.display())))
}

/// Reads a private key.
///
/// # Errors
/// Unreadable file or not an Ed25519 PKCS#8 PEM key.
pub fn read_signing_key(path: &Path) -> Result<SigningKey, SignError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| SignError::Io(format!("{}: {e}", path.display())))?;
    SigningKey::from_pkcs8_pem(&text).map_err(|e| SignError::Key {
        path: path.display().to_string(),
        why: e.to_string(),
    })
}

/// Reads a public key (PEM).
///
/// # Errors
/// Unreadable file or not an Ed25519 public key.
pub fn read_verifying_key(path: &Path) -> Result<VerifyingKey, SignError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| SignError::Io(format!("{}: {e}", path.display())))?;
    VerifyingKey::from_public_key_pem(&text).map_err(|e| SignError::Key {
        path: path.display().to_string(),
        why: e.to_string(),
    })
}

/// The printed name stored beside a private key, if any.
pub fn signer_beside(private: &Path) -> Option<String> {
    let (_, signer_path) = key_companions(private);
    let text = std::fs::read_to_string(signer_path).ok()?;
    serde_json::from_str::<SignerFile>(&text)
        .ok()
        .map(|s| s.signer)
}

/// The bytes a signature covers: the canonical form of the document without `value`.
///
/// # Errors
/// A value with no canonical form.
pub fn signed_bytes(doc: &Value) -> Result<Vec<u8>, SignError> {
    let mut v = doc.clone();
    if let Some(sig) = v.get_mut("signature").and_then(Value::as_object_mut) {
        sig.remove("value");
    }
    canonical_bytes(&v).map_err(|e| SignError::Canonical(e.to_string()))
}

/// Signs a record.
///
/// # Errors
/// A record with no canonical form.
pub fn sign(
    record: &Record,
    key: &SigningKey,
    signer: &str,
    meaning: Meaning,
    signed_at: &str,
) -> Result<SignedSummary, SignError> {
    let record_value =
        serde_json::to_value(record).map_err(|e| SignError::Canonical(e.to_string()))?;
    sign_value(record_value, key, signer, meaning, signed_at)
}

/// Signs a record already in JSON form.
///
/// # Errors
/// A record with no canonical form.
pub fn sign_value(
    record: Value,
    key: &SigningKey,
    signer: &str,
    meaning: Meaning,
    signed_at: &str,
) -> Result<SignedSummary, SignError> {
    let vk = key.verifying_key();
    let mut summary = SignedSummary {
        schema: SIGNED_SCHEMA.into(),
        record,
        signature: SignatureBlock {
            signer: signer.to_string(),
            signed_at: signed_at.to_string(),
            meaning,
            algorithm: "Ed25519".into(),
            canonicalization: "RFC 8785".into(),
            public_key: hex(vk.as_bytes()),
            key_fingerprint: fingerprint(&vk),
            value: String::new(),
        },
    };
    let doc = serde_json::to_value(&summary).map_err(|e| SignError::Canonical(e.to_string()))?;
    let bytes = signed_bytes(&doc)?;
    summary.signature.value = hex(&key.sign(&bytes).to_bytes());
    Ok(summary)
}

impl SignedSummary {
    /// Pretty JSON.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }
}

fn unhex(s: &str) -> Option<Vec<u8>> {
    if !s.len().is_multiple_of(2) {
        return None;
    }
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(s.get(i..i + 2)?, 16).ok())
        .collect()
}

/// Why a signed summary does not verify.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum VerifyError {
    /// Not JSON, truncated, or not a signed summary.
    #[error("not a lotshift signed summary: {0}")]
    Malformed(String),
    /// The signature does not match the document.
    #[error(
        "the signature does not match: the record or the signature manifestation (name, time, \
         meaning) was changed after signing"
    )]
    BadSignature,
    /// The fingerprint does not belong to the public key in the document.
    #[error("the key fingerprint {0} does not belong to the public key in the summary")]
    Fingerprint(String),
    /// Signed by another key than the one expected.
    #[error("signed by key {found}, not by the expected key {expected}")]
    WrongKey {
        /// Fingerprint in the summary.
        found: String,
        /// Fingerprint of the expected key.
        expected: String,
    },
}

/// Checks a signed summary's signature; returns the parsed summary.
///
/// # Errors
/// The first check that fails.
pub fn verify_signature(
    text: &str,
    expected: Option<&VerifyingKey>,
) -> Result<SignedSummary, VerifyError> {
    let doc: Value =
        serde_json::from_str(text).map_err(|e| VerifyError::Malformed(e.to_string()))?;
    let summary: SignedSummary =
        serde_json::from_value(doc.clone()).map_err(|e| VerifyError::Malformed(e.to_string()))?;
    if summary.schema != SIGNED_SCHEMA {
        return Err(VerifyError::Malformed(format!(
            "schema is \"{}\"",
            summary.schema
        )));
    }
    let sig = &summary.signature;
    if sig.algorithm != "Ed25519" || sig.canonicalization != "RFC 8785" {
        return Err(VerifyError::Malformed(format!(
            "unsupported algorithm {} / canonicalization {}",
            sig.algorithm, sig.canonicalization
        )));
    }
    let key_bytes: [u8; 32] = unhex(&sig.public_key)
        .and_then(|b| b.try_into().ok())
        .ok_or_else(|| VerifyError::Malformed("public key is not 32 hex-coded bytes".into()))?;
    let key = VerifyingKey::from_bytes(&key_bytes)
        .map_err(|e| VerifyError::Malformed(format!("public key: {e}")))?;
    if fingerprint(&key) != sig.key_fingerprint {
        return Err(VerifyError::Fingerprint(sig.key_fingerprint.clone()));
    }
    let sig_bytes: [u8; 64] = unhex(&sig.value)
        .and_then(|b| b.try_into().ok())
        .ok_or_else(|| VerifyError::Malformed("signature is not 64 hex-coded bytes".into()))?;
    let signature = Signature::from_bytes(&sig_bytes);
    let bytes = signed_bytes(&doc).map_err(|e| VerifyError::Malformed(e.to_string()))?;
    key.verify(&bytes, &signature)
        .map_err(|_| VerifyError::BadSignature)?;
    if let Some(exp) = expected
        && exp.as_bytes() != key.as_bytes()
    {
        return Err(VerifyError::WrongKey {
            found: sig.key_fingerprint.clone(),
            expected: fingerprint(exp),
        });
    }
    Ok(summary)
}

/// Record keys holding the program's wording (the verdict, reasons, warnings): a later
/// version may word the same result differently, so they are compared only with a record
/// made by this version.
const PROSE: [&str; 3] = ["verdict", "why", "warnings"];

/// The first number (or string) that differs between two records, as `path: recorded vs
/// recomputed`. Numbers agree when within 1e-9 relative (floating-point results may differ in
/// the last digits between processors); fields that describe the run itself (time, program
/// version, file names) are not compared, and the wording (`PROSE`) only when the record was
/// made by this version of the program (the numbers and every data-derived text always are).
pub fn first_difference(recorded: &Value, recomputed: &Value) -> Option<String> {
    let same_version = recorded["software"]["version"].as_str() == Some(env!("CARGO_PKG_VERSION"));
    walk("", recorded, recomputed, same_version)
}

fn walk(path: &str, a: &Value, b: &Value, prose: bool) -> Option<String> {
    {
        // `fields` (what was typed about the comparison), `protocol` (what it ran under) and
        // `audit_trail` (the runs before it) are not results: never recomputed.
        const SKIP: [&str; 6] = [
            "analysed_at",
            "software",
            "file",
            "fields",
            "protocol",
            "audit_trail",
        ];
        match (a, b) {
            (Value::Object(x), Value::Object(y)) => {
                for (k, va) in x {
                    if SKIP.contains(&k.as_str()) || (!prose && PROSE.contains(&k.as_str())) {
                        continue;
                    }
                    let p = if path.is_empty() {
                        k.clone()
                    } else {
                        format!("{path}.{k}")
                    };
                    match y.get(k) {
                        Some(vb) => {
                            if let Some(d) = walk(&p, va, vb, prose) {
                                return Some(d);
                            }
                        }
                        None => return Some(format!("{p}: recorded but not recomputed")),
                    }
                }
                None
            }
            (Value::Array(x), Value::Array(y)) => {
                if x.len() != y.len() {
                    return Some(format!(
                        "{path}: {} entries recorded, {} recomputed",
                        x.len(),
                        y.len()
                    ));
                }
                x.iter()
                    .zip(y)
                    .enumerate()
                    .find_map(|(i, (va, vb))| walk(&format!("{path}[{i}]"), va, vb, prose))
            }
            (Value::Number(x), Value::Number(y)) => {
                let (x, y) = (
                    x.as_f64().unwrap_or(f64::NAN),
                    y.as_f64().unwrap_or(f64::NAN),
                );
                let tol = 1e-9 * x.abs().max(y.abs());
                ((x - y).abs() > tol).then(|| format!("{path}: recorded {x}, recomputed {y}"))
            }
            (x, y) if x == y => None,
            (x, y) => Some(format!("{path}: recorded {x}, recomputed {y}")),
        }
    }
}

/// Writes a signed summary atomically.
///
/// # Errors
/// I/O errors, with the path.
pub fn write_summary(path: &Path, summary: &SignedSummary) -> Result<(), SignError> {
    write_atomic(path, summary.to_json().as_bytes()).map_err(|e| SignError::Io(e.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn civil_dates() {
        // Known instants: the Unix epoch, a leap day, and the end of 1999.
        assert_eq!(rfc3339_from_unix(0), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339_from_unix(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339_from_unix(946_684_799), "1999-12-31T23:59:59Z");
    }

    #[test]
    fn sign_then_verify_and_tamper() {
        let key = SigningKey::from_bytes(&[7u8; 32]);
        let record =
            serde_json::json!({"schema": "x", "hotelling": {"t2": 21.828, "p_value": 0.0023}});
        let s = sign_value(
            record,
            &key,
            "A. Engineer",
            Meaning::Review,
            "2026-12-02T03:30:00Z",
        )
        .unwrap();
        let text = s.to_json();
        assert!(verify_signature(&text, Some(&key.verifying_key())).is_ok());
        let tampered = text.replace("21.828", "21.829");
        assert_eq!(
            verify_signature(&tampered, None).unwrap_err(),
            VerifyError::BadSignature
        );
        let other = SigningKey::from_bytes(&[8u8; 32]);
        assert!(matches!(
            verify_signature(&text, Some(&other.verifying_key())).unwrap_err(),
            VerifyError::WrongKey { .. }
        ));
    }
}
