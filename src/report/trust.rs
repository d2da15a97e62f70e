//! The trusted-signers list: the public keys the quality system accepts, each with the
//! printed name it was issued to and the roles its holder may sign in (author, reviewer,
//! approver). `verify --trusted FILE` checks every signature of a summary against it.
//!
//! The file is JSON, `{"schema": "lotshift.trusted-signers/1", "signers": [{"name",
//! "roles", "public_key", "key_fingerprint", "added_at"}]}`; `public_key` is the 32-byte
//! Ed25519 key in hex and `key_fingerprint` its `SHA256:` fingerprint (both are checked
//! against each other when the file is read).

use std::path::Path;

use ed25519_dalek::VerifyingKey;
use serde::{Deserialize, Serialize};
use sha2::{Digest as _, Sha256};

use super::sign::{Meaning, SignatureBlock, fingerprint, now_rfc3339, public_key_from_hex};
use super::write_atomic;
use crate::data::hex;

/// Schema of a trusted-signers list.
pub const TRUSTED_SCHEMA: &str = "lotshift.trusted-signers/1";

/// A role a trusted signer may sign in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    /// Signs for authorship.
    Author,
    /// Signs for review.
    Reviewer,
    /// Signs for approval.
    Approver,
}

impl Role {
    /// Parses `author`, `reviewer` or `approver`.
    pub fn parse(s: &str) -> Option<Role> {
        match s.trim().to_ascii_lowercase().as_str() {
            "author" => Some(Role::Author),
            "reviewer" => Some(Role::Reviewer),
            "approver" => Some(Role::Approver),
            _ => None,
        }
    }

    /// The word in the file.
    pub fn as_str(self) -> &'static str {
        match self {
            Role::Author => "author",
            Role::Reviewer => "reviewer",
            Role::Approver => "approver",
        }
    }

    /// The role a signature of this meaning is made in.
    pub fn for_meaning(m: Meaning) -> Role {
        match m {
            Meaning::Authorship => Role::Author,
            Meaning::Review => Role::Reviewer,
            Meaning::Approval => Role::Approver,
        }
    }
}

/// One trusted signer.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrustedSigner {
    /// The printed name the key was issued to.
    pub name: String,
    /// The roles the holder may sign in.
    pub roles: Vec<Role>,
    /// Ed25519 public key, 32 bytes in hex.
    pub public_key: String,
    /// `SHA256:` fingerprint of the public key.
    pub key_fingerprint: String,
    /// When the entry was added (RFC 3339 UTC).
    #[serde(default)]
    pub added_at: Option<String>,
}

/// The trusted-signers list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrustedList {
    /// Always [`TRUSTED_SCHEMA`].
    pub schema: String,
    /// The signers.
    pub signers: Vec<TrustedSigner>,
}

/// A trusted-signers list that cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum TrustError {
    /// Unreadable, not JSON, or not a list.
    #[error("{path}: not a lotshift trusted-signers list: {why}")]
    Malformed {
        /// The file.
        path: String,
        /// Why.
        why: String,
    },
    /// One entry is wrong.
    #[error("{path}: trusted signer {index} ({name}): {why}")]
    Entry {
        /// The file.
        path: String,
        /// 1-based entry.
        index: usize,
        /// The entry's name.
        name: String,
        /// Why.
        why: String,
    },
    /// Writing the list failed.
    #[error("{0}")]
    Io(String),
}

/// A list as read, with the SHA-256 of the file's bytes.
#[derive(Debug, Clone)]
pub struct ReadList {
    /// The list.
    pub list: TrustedList,
    /// SHA-256 of the file, hex.
    pub sha256: String,
}

/// Reads and checks a trusted-signers list: the schema, and each entry's name, roles, key and
/// fingerprint (and that no key is listed twice).
///
/// # Errors
/// The file and what is wrong in it.
pub fn read_trusted(path: &Path) -> Result<ReadList, TrustError> {
    let shown = path.display().to_string();
    let malformed = |why: String| TrustError::Malformed {
        path: shown.clone(),
        why,
    };
    let bytes = std::fs::read(path).map_err(|e| malformed(e.to_string()))?;
    let list: TrustedList = serde_json::from_slice(&bytes).map_err(|e| malformed(e.to_string()))?;
    if list.schema != TRUSTED_SCHEMA {
        return Err(malformed(format!(
            "schema is \"{}\", not \"{TRUSTED_SCHEMA}\"",
            list.schema
        )));
    }
    for (k, s) in list.signers.iter().enumerate() {
        let entry = |why: String| TrustError::Entry {
            path: shown.clone(),
            index: k + 1,
            name: s.name.clone(),
            why,
        };
        if s.name.trim().is_empty() {
            return Err(entry("no printed name".into()));
        }
        if s.roles.is_empty() {
            return Err(entry("no role (author, reviewer or approver)".into()));
        }
        let key = public_key_from_hex(&s.public_key)
            .ok_or_else(|| entry("public_key is not a 32-byte Ed25519 key in hex".into()))?;
        if fingerprint(&key) != s.key_fingerprint {
            return Err(entry(format!(
                "key_fingerprint {} does not belong to its public_key",
                s.key_fingerprint
            )));
        }
        if let Some(j) = list.signers[..k]
            .iter()
            .position(|o| o.key_fingerprint == s.key_fingerprint)
        {
            return Err(entry(format!(
                "the same key as trusted signer {} ({})",
                j + 1,
                list.signers[j].name
            )));
        }
    }
    Ok(ReadList {
        sha256: hex(&Sha256::digest(&bytes)),
        list,
    })
}

/// Adds a signer to the list at `path` (made when there is none), written atomically.
///
/// # Errors
/// An unreadable list, a key already listed, a blank name or no role.
pub fn add_trusted(
    path: &Path,
    key: &VerifyingKey,
    name: &str,
    roles: &[Role],
) -> Result<TrustedSigner, TrustError> {
    let mut list = if path.exists() {
        read_trusted(path)?.list
    } else {
        TrustedList {
            schema: TRUSTED_SCHEMA.into(),
            signers: Vec::new(),
        }
    };
    let entry = TrustedSigner {
        name: name.trim().to_string(),
        roles: roles.to_vec(),
        public_key: hex(key.as_bytes()),
        key_fingerprint: fingerprint(key),
        added_at: Some(now_rfc3339()),
    };
    let bad = |why: String| TrustError::Entry {
        path: path.display().to_string(),
        index: list.signers.len() + 1,
        name: entry.name.clone(),
        why,
    };
    if entry.name.is_empty() {
        return Err(bad("no printed name".into()));
    }
    if entry.roles.is_empty() {
        return Err(bad("no role (author, reviewer or approver)".into()));
    }
    if let Some(o) = list
        .signers
        .iter()
        .find(|o| o.key_fingerprint == entry.key_fingerprint)
    {
        return Err(bad(format!(
            "the key {} is already listed, for {}",
            entry.key_fingerprint, o.name
        )));
    }
    list.signers.push(entry.clone());
    let text = serde_json::to_string_pretty(&list).map_err(|e| TrustError::Io(e.to_string()))?;
    write_atomic(path, text.as_bytes())
        .map_err(|e| TrustError::Io(format!("the trusted-signers list was not written: {e}")))?;
    Ok(entry)
}

/// How one signature stands against the trusted list.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Standing {
    /// The key is listed under the printed name shown, with the role the meaning needs.
    Trusted,
    /// The key is not in the list.
    UnknownKey,
    /// The key is listed under another printed name.
    NameDiffers {
        /// The name in the list.
        listed: String,
    },
    /// The key is listed under that name, but not for the role the meaning needs.
    RoleMissing {
        /// The roles in the list.
        listed: Vec<Role>,
    },
}

impl TrustedList {
    /// How `sig` stands: the key (fingerprint) must be listed, under exactly the printed name
    /// shown, with the role of the signature's meaning.
    pub fn standing(&self, sig: &SignatureBlock) -> Standing {
        let Some(entry) = self
            .signers
            .iter()
            .find(|s| s.key_fingerprint == sig.key_fingerprint && s.public_key == sig.public_key)
        else {
            return Standing::UnknownKey;
        };
        if entry.name != sig.signer {
            return Standing::NameDiffers {
                listed: entry.name.clone(),
            };
        }
        if !entry.roles.contains(&Role::for_meaning(sig.meaning)) {
            return Standing::RoleMissing {
                listed: entry.roles.clone(),
            };
        }
        Standing::Trusted
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ed25519_dalek::SigningKey;

    fn block(key: &SigningKey, name: &str, meaning: Meaning) -> SignatureBlock {
        let vk = key.verifying_key();
        SignatureBlock {
            signer: name.into(),
            signed_at: "2026-12-02T03:30:00Z".into(),
            meaning,
            comment: Some(String::new()),
            algorithm: "Ed25519".into(),
            canonicalization: "RFC 8785".into(),
            public_key: hex(vk.as_bytes()),
            key_fingerprint: fingerprint(&vk),
            value: String::new(),
        }
    }

    #[test]
    fn standing_needs_key_name_and_role() {
        let dir = std::env::temp_dir().join(format!("lotshift-trust-unit-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("trusted.json");
        let a = SigningKey::from_bytes(&[1u8; 32]);
        let b = SigningKey::from_bytes(&[2u8; 32]);
        add_trusted(&path, &a.verifying_key(), "Ana Lind", &[Role::Author]).unwrap();
        // The same key twice is refused, the file is kept.
        assert!(add_trusted(&path, &a.verifying_key(), "Ana Lind", &[Role::Reviewer]).is_err());
        let list = read_trusted(&path).unwrap().list;
        assert_eq!(list.signers.len(), 1);
        assert_eq!(
            list.standing(&block(&a, "Ana Lind", Meaning::Authorship)),
            Standing::Trusted
        );
        assert_eq!(
            list.standing(&block(&a, "Ana Lindh", Meaning::Authorship)),
            Standing::NameDiffers {
                listed: "Ana Lind".into()
            }
        );
        assert_eq!(
            list.standing(&block(&a, "Ana Lind", Meaning::Approval)),
            Standing::RoleMissing {
                listed: vec![Role::Author]
            }
        );
        assert_eq!(
            list.standing(&block(&b, "Ana Lind", Meaning::Authorship)),
            Standing::UnknownKey
        );
        // An entry whose fingerprint is not its key's is refused when read, naming it.
        let text = std::fs::read_to_string(&path)
            .unwrap()
            .replace("SHA256:", "SHA256:00");
        std::fs::write(&path, text).unwrap();
        let e = read_trusted(&path).unwrap_err().to_string();
        assert!(e.contains("trusted signer 1 (Ana Lind)"), "{e}");
        std::fs::remove_dir_all(dir).unwrap();
    }
}
