//! The audit trail of the comparisons run in the window: one JSON line per run (when, which
//! lot files, which characteristics and settings, the result's headline), each carrying the
//! SHA-256 of the entry before it and its own, over the entry's RFC 8785 canonical bytes. An
//! entry edited, removed or moved breaks the chain at that line, so the trail cannot be
//! changed without detection (compare 21 CFR Part 11, §11.10(e)). A record made in the window
//! keeps the runs made on the same lot files, and the hash of the last one; `verify --trail`
//! checks both against the file.

use std::io::Write as _;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use sha2::{Digest as _, Sha256};

use super::canonical::canonical_bytes;
use crate::data::hex;

/// The `previous` of the first entry.
pub const GENESIS: &str = "0000000000000000000000000000000000000000000000000000000000000000";

/// One run, as the trail keeps it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrailEntry {
    /// Position in the trail, from 1.
    pub seq: u64,
    /// When the result arrived (RFC 3339, UTC).
    pub at: String,
    /// SHA-256 of the reference and candidate lot files.
    pub lots: [String; 2],
    /// The characteristics compared, in order.
    pub characteristics: Vec<String>,
    /// The settings, as the record's `settings`.
    pub settings: serde_json::Value,
    /// The result in a line.
    pub headline: String,
    /// Hash of the entry before (or [`GENESIS`]).
    pub previous: String,
    /// SHA-256 of this entry's canonical bytes with `hash` left out.
    pub hash: String,
}

/// The trail cannot be read or does not hold together.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TrailError {
    /// I/O.
    #[error("{file}: {message}")]
    Io {
        /// The trail file.
        file: String,
        /// Why.
        message: String,
    },
    /// A line that is not an entry, or whose hash or link does not hold.
    #[error("{file}, line {line}: {message}")]
    Broken {
        /// The trail file.
        file: String,
        /// The line, from 1.
        line: usize,
        /// What does not hold.
        message: String,
    },
}

/// The hash an entry must carry.
pub fn entry_hash(e: &TrailEntry) -> String {
    let mut v = serde_json::to_value(e).unwrap_or_default();
    if let Some(m) = v.as_object_mut() {
        m.remove("hash");
    }
    let bytes = canonical_bytes(&v).unwrap_or_default();
    hex(&Sha256::digest(&bytes))
}

/// Reads a trail and checks every link: each entry's hash, its `previous` equal to the hash
/// of the line before, and its `seq` one more. Returns the entries.
///
/// # Errors
/// The file cannot be read, or the first line where the chain does not hold.
pub fn read_chain(path: &Path) -> Result<Vec<TrailEntry>, TrailError> {
    let file = path.display().to_string();
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => {
            return Err(TrailError::Io {
                file,
                message: e.to_string(),
            });
        }
    };
    let mut out: Vec<TrailEntry> = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let broken = |message: String| TrailError::Broken {
            file: file.clone(),
            line: i + 1,
            message,
        };
        if line.trim().is_empty() {
            return Err(broken("an empty line: an entry was removed".into()));
        }
        let e: TrailEntry = serde_json::from_str(line)
            .map_err(|err| broken(format!("not a trail entry ({err})")))?;
        let want_previous = out.last().map_or(GENESIS, |p| p.hash.as_str());
        if e.previous != want_previous {
            return Err(broken(format!(
                "the link to the entry before does not hold (previous {}, the entry before has \
                 {want_previous}): an entry was removed, added or moved",
                e.previous
            )));
        }
        let want_seq = out.last().map_or(1, |p| p.seq + 1);
        if e.seq != want_seq {
            return Err(broken(format!("seq is {}, expected {want_seq}", e.seq)));
        }
        let h = entry_hash(&e);
        if h != e.hash {
            return Err(broken(format!(
                "the entry was edited: its content hashes to {h}, it carries {}",
                e.hash
            )));
        }
        out.push(e);
    }
    Ok(out)
}

/// An audit trail file the window appends to.
#[derive(Debug, Clone, PartialEq)]
pub struct Trail {
    /// The file.
    pub path: PathBuf,
    /// The last entry, once read or written.
    last: Option<(u64, String)>,
}

impl Trail {
    /// The trail in `path` (created with the first entry).
    pub fn at(path: PathBuf) -> Self {
        Trail { path, last: None }
    }

    /// Where the window keeps its trail: `$XDG_DATA_HOME/lotshift/audit-trail.jsonl`, else
    /// `$HOME/.local/share/lotshift/audit-trail.jsonl`.
    pub fn default_path() -> Option<PathBuf> {
        let base = std::env::var_os("XDG_DATA_HOME")
            .map(PathBuf::from)
            .filter(|p| p.is_absolute())
            .or_else(|| {
                std::env::var_os("HOME").map(|h| PathBuf::from(h).join(".local").join("share"))
            })?;
        Some(base.join("lotshift").join("audit-trail.jsonl"))
    }

    /// Appends a run and returns its entry. The chain is checked when the file is first
    /// used; a broken trail is not appended to (the problem is returned, naming the line).
    ///
    /// # Errors
    /// The file cannot be read or written, or its chain is broken.
    pub fn append(
        &mut self,
        at: String,
        lots: [String; 2],
        characteristics: Vec<String>,
        settings: serde_json::Value,
        headline: String,
    ) -> Result<TrailEntry, TrailError> {
        let io = |e: std::io::Error| TrailError::Io {
            file: self.path.display().to_string(),
            message: e.to_string(),
        };
        if self.last.is_none() {
            let all = read_chain(&self.path)?;
            self.last = Some(
                all.last()
                    .map_or((0, GENESIS.to_string()), |e| (e.seq, e.hash.clone())),
            );
        }
        let (seq, previous) = self.last.clone().unwrap_or((0, GENESIS.to_string()));
        let mut e = TrailEntry {
            seq: seq + 1,
            at,
            lots,
            characteristics,
            settings,
            headline,
            previous,
            hash: String::new(),
        };
        e.hash = entry_hash(&e);
        if let Some(dir) = self.path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(io)?;
        }
        let mut line = serde_json::to_string(&e).map_err(|err| TrailError::Io {
            file: self.path.display().to_string(),
            message: err.to_string(),
        })?;
        line.push('\n');
        // One write of a whole line to a file opened for appending.
        let mut f = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(&self.path)
            .map_err(io)?;
        f.write_all(line.as_bytes()).map_err(io)?;
        f.sync_data().map_err(io)?;
        self.last = Some((e.seq, e.hash.clone()));
        Ok(e)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp(tag: &str) -> PathBuf {
        let p =
            std::env::temp_dir().join(format!("lotshift-trail-{tag}-{}.jsonl", std::process::id()));
        let _ = std::fs::remove_file(&p);
        p
    }

    fn three(path: &Path) {
        let mut t = Trail::at(path.to_path_buf());
        for k in 0..3 {
            t.append(
                format!("2026-12-02T10:0{k}:00Z"),
                ["a".repeat(64), "b".repeat(64)],
                vec!["hub length".into()],
                serde_json::json!({"alpha": 0.05}),
                format!("run {k}"),
            )
            .unwrap();
        }
    }

    #[test]
    fn an_intact_chain_reads_back_and_continues() {
        let p = temp("intact");
        three(&p);
        let all = read_chain(&p).unwrap();
        assert_eq!(all.len(), 3);
        assert_eq!(all[0].previous, GENESIS);
        assert_eq!(all[2].previous, all[1].hash);
        // A new session continues the same chain.
        let mut t = Trail::at(p.clone());
        let e = t
            .append(
                "t".into(),
                ["a".into(), "b".into()],
                vec![],
                serde_json::json!({}),
                "x".into(),
            )
            .unwrap();
        assert_eq!((e.seq, e.previous.as_str()), (4, all[2].hash.as_str()));
        assert_eq!(read_chain(&p).unwrap().len(), 4);
    }

    #[test]
    fn an_edited_removed_or_moved_entry_is_found_at_its_line() {
        let p = temp("edited");
        three(&p);
        let text = std::fs::read_to_string(&p).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        // Edited: the headline of the second run.
        std::fs::write(&p, text.replacen("run 1", "run 9", 1)).unwrap();
        let e = read_chain(&p).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("edited"), "{e}");
        // Removed: the second line.
        std::fs::write(&p, format!("{}\n{}\n", lines[0], lines[2])).unwrap();
        let e = read_chain(&p).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("link"), "{e}");
        // Moved: the last two swapped.
        std::fs::write(&p, format!("{}\n{}\n{}\n", lines[0], lines[2], lines[1])).unwrap();
        assert!(read_chain(&p).unwrap_err().to_string().contains("line 2"));
        // A broken trail is not appended to.
        let mut t = Trail::at(p.clone());
        assert!(
            t.append(
                "t".into(),
                ["a".into(), "b".into()],
                vec![],
                serde_json::json!({}),
                "x".into()
            )
            .is_err()
        );
    }
}
