//! Signatures on a comparison protocol (authorship, review, approval), kept in a file beside
//! it so that the protocol's bytes, and so its SHA-256, never change by being signed.
//!
//! `hub-protocol.json` is signed in `hub-protocol.signatures.json`, schema
//! `lotshift.protocol-signatures/1`: `{schema, protocol_sha256, signatures: [block, …]}` with
//! the same signature blocks as a signed summary ([`SignatureBlock`]). Signature `k` signs the
//! RFC 8785 canonical bytes of that document with the list cut after block `k` and that
//! block's `value` left out: the protocol's content (through its SHA-256) and every earlier
//! signature. A comparison run under the protocol copies the blocks into its record
//! (`protocol.signatures`), where they are checked again against the recorded SHA-256 without
//! the file.

use std::path::{Path, PathBuf};

use ed25519_dalek::SigningKey;
use serde::{Deserialize, Serialize};
use serde_json::Value;

use super::sign::{self, Manifestation, SignError, SignatureBlock, VerifyError};

/// Schema of a protocol's signatures file.
pub const PROTOCOL_SIGNATURES_SCHEMA: &str = "lotshift.protocol-signatures/1";

/// A protocol's signatures file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProtocolSignatures {
    /// Always [`PROTOCOL_SIGNATURES_SCHEMA`].
    pub schema: String,
    /// SHA-256 of the protocol file's bytes, as signed.
    pub protocol_sha256: String,
    /// The signatures in the order they were added.
    pub signatures: Vec<SignatureBlock>,
}

/// Why a protocol's signatures cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ProtocolSignatureError {
    /// Not JSON, or not a signatures file.
    #[error("{file}: not a lotshift protocol-signatures file: {why}")]
    Malformed {
        /// The signatures file.
        file: String,
        /// Why.
        why: String,
    },
    /// The protocol's bytes are not the ones signed.
    #[error(
        "{file}: its signatures are of a protocol whose SHA-256 is {signed}, but the protocol \
         now has {now}: it was changed after it was signed"
    )]
    Changed {
        /// The signatures file.
        file: String,
        /// The SHA-256 signed.
        signed: String,
        /// The protocol's SHA-256 now.
        now: String,
    },
    /// A signature does not match.
    #[error("{file}: {why}")]
    Signature {
        /// The signatures file (or the record).
        file: String,
        /// The signature check's reason.
        why: VerifyError,
    },
}

/// The signatures file of the protocol `protocol`: beside it, its name with `.json` replaced
/// by `.signatures.json` (`hub-protocol.json` → `hub-protocol.signatures.json`).
pub fn signatures_path(protocol: &Path) -> PathBuf {
    let name = protocol
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let stem = name.strip_suffix(".json").unwrap_or(&name);
    protocol.with_file_name(format!("{stem}.signatures.json"))
}

fn document(protocol_sha256: &str, signatures: &[SignatureBlock]) -> Result<Value, String> {
    serde_json::to_value(ProtocolSignatures {
        schema: PROTOCOL_SIGNATURES_SCHEMA.into(),
        protocol_sha256: protocol_sha256.into(),
        signatures: signatures.to_vec(),
    })
    .map_err(|e| e.to_string())
}

/// Checks every signature in `signatures` over the protocol with SHA-256 `protocol_sha256`
/// (from a signatures file or a record's `protocol.signatures`).
///
/// # Errors
/// The first signature that does not match, in words.
pub fn check(protocol_sha256: &str, signatures: &[SignatureBlock]) -> Result<(), VerifyError> {
    let doc = document(protocol_sha256, signatures).map_err(VerifyError::Malformed)?;
    let n = signatures.len();
    for (k, s) in signatures.iter().enumerate() {
        let at = format!("{} of {n}, {} by {}", k + 1, s.meaning, s.signer);
        sign::check_block(&doc, k, s, Some(at))?;
    }
    Ok(())
}

/// Reads the signatures file `path` of a protocol whose bytes have SHA-256 `protocol_sha256`
/// and checks every signature in it.
///
/// # Errors
/// The file does not parse, its schema is another, the protocol changed since it was signed,
/// or a signature does not match.
pub fn read(
    path: &Path,
    protocol_sha256: &str,
) -> Result<ProtocolSignatures, ProtocolSignatureError> {
    let file = path.display().to_string();
    let malformed = |why: String| ProtocolSignatureError::Malformed {
        file: file.clone(),
        why,
    };
    let text = std::fs::read_to_string(path).map_err(|e| malformed(e.to_string()))?;
    let s: ProtocolSignatures =
        serde_json::from_str(&text).map_err(|e| malformed(e.to_string()))?;
    if s.schema != PROTOCOL_SIGNATURES_SCHEMA {
        return Err(malformed(format!("schema is \"{}\"", s.schema)));
    }
    if s.signatures.is_empty() {
        return Err(malformed("the list of signatures is empty".into()));
    }
    if s.protocol_sha256 != protocol_sha256 {
        return Err(ProtocolSignatureError::Changed {
            file,
            signed: s.protocol_sha256,
            now: protocol_sha256.into(),
        });
    }
    check(protocol_sha256, &s.signatures)
        .map_err(|why| ProtocolSignatureError::Signature { file, why })?;
    Ok(s)
}

/// Adds a signature to the protocol with SHA-256 `protocol_sha256` after the signatures in
/// `earlier` (already checked by [`read`]; empty for the first one).
///
/// # Errors
/// A manifestation with no canonical form.
pub fn add(
    protocol_sha256: &str,
    earlier: &[SignatureBlock],
    key: &SigningKey,
    m: &Manifestation,
) -> Result<ProtocolSignatures, SignError> {
    let doc = document(protocol_sha256, earlier).map_err(SignError::Canonical)?;
    let (doc, _) = sign::append_to(doc, key, m)?;
    ProtocolSignatures::deserialize(&doc).map_err(|e| SignError::Canonical(e.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn key(seed: u8) -> SigningKey {
        SigningKey::from_bytes(&[seed; 32])
    }

    fn manifestation(signer: &str, meaning: sign::Meaning) -> Manifestation {
        Manifestation {
            signer: signer.into(),
            signed_at: "2026-12-03T09:00:00Z".into(),
            meaning,
            comment: "protocol read".into(),
        }
    }

    #[test]
    fn the_signatures_file_sits_beside_the_protocol() {
        assert_eq!(
            signatures_path(Path::new("plans/hub-protocol.json")),
            Path::new("plans/hub-protocol.signatures.json")
        );
        assert_eq!(
            signatures_path(Path::new("plan")),
            Path::new("plan.signatures.json")
        );
    }

    #[test]
    fn each_signature_covers_the_protocol_and_every_earlier_one() {
        let sha = "ab".repeat(32);
        let one = add(
            &sha,
            &[],
            &key(1),
            &manifestation("Ana Lind", sign::Meaning::Authorship),
        )
        .unwrap();
        let two = add(
            &sha,
            &one.signatures,
            &key(2),
            &manifestation("Cleo Marsh", sign::Meaning::Approval),
        )
        .unwrap();
        assert!(check(&sha, &two.signatures).is_ok());
        // Another protocol's hash, a reordered or shortened-in-the-middle list, an edited name.
        assert!(check(&"cd".repeat(32), &two.signatures).is_err());
        let mut swapped = two.signatures.clone();
        swapped.swap(0, 1);
        assert!(check(&sha, &swapped).is_err());
        assert!(check(&sha, &two.signatures[1..]).is_err());
        let mut renamed = two.signatures.clone();
        renamed[0].signer = "Ana Lindh".into();
        assert!(check(&sha, &renamed).is_err());
    }
}
