//! The comparison record (JSON, versioned), its readable text form, and safe writing.

mod canonical;
pub mod html;
pub mod protocol_sign;
mod record;
pub mod sections;
pub mod sign;
mod text;
pub mod trail;
pub mod trust;

pub use canonical::{CanonicalError, canonical_bytes};
pub use record::{
    AuditRecord, AuditRun, CAUTION, Deviation, FieldRecord, LotRecord, OutlierRecord,
    OutlierSection, ProtocolRecord, Record, SCHEMA, SCHEMA_V1, STANDARD_FIELDS, Software,
    SourceRecord, parse_field,
};
pub use text::{box_m_line, mardia_line, permutation_line, render_text, unequal_line};

use std::io::Write as _;
use std::path::Path;

/// Writes `bytes` to `path` atomically: a temporary file in the same folder, flushed to disk,
/// then renamed over the target. A failure leaves no partial file and the old file intact.
/// A target that exists and is not a regular file (`/dev/null`, a named pipe, a terminal) is
/// written to directly: renaming over it would replace the device or pipe with a file.
///
/// # Errors
/// Any I/O error, with the path in the message.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    if std::fs::metadata(path).is_ok_and(|m| !m.is_file() && !m.is_dir()) {
        return std::fs::OpenOptions::new()
            .write(true)
            .open(path)
            .and_then(|mut f| f.write_all(bytes))
            .map_err(|e| std::io::Error::new(e.kind(), format!("{}: {e}", path.display())));
    }
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.map_err(|e| std::io::Error::new(e.kind(), format!("{}: {e}", path.display())))
}
