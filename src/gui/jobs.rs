//! The window's background jobs besides comparisons: reading lot and specification files,
//! file dialogs, writing the record, the specification and signed summaries, and the signing
//! keys and signatures (reading, creating and looking at keys, signing, checking a signed
//! summary). Each runs on its own thread and delivers an [`Outcome`]; none runs on the UI
//! thread, so no frame waits for a disk, a dialog or a signature.

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};

use crate::data::spec::{Spec, SpecRow};
use crate::data::{self, LoadOptions, Lot};
use crate::report::Record;
use crate::report::sign::{self, Meaning};

use crate::source::QuerySource;

use super::worker::{
    DatabaseJob, Ends, Outcome, Purpose, Slot, Source, Worker, panic_text, sha256_hex,
};

fn load_source(src: &Source, options: &LoadOptions) -> Result<Lot, String> {
    match src {
        Source::Path(p) => data::load(p, options),
        Source::Embedded(name, bytes) => data::load_bytes(name, bytes, options),
    }
    .map_err(|e| e.to_string())
}

/// Runs `job`, turning a panic into an error naming `what`.
fn guarded<T>(what: &str, job: impl FnOnce() -> Result<T, String>) -> Result<T, String> {
    catch_unwind(AssertUnwindSafe(job))
        .unwrap_or_else(|e| Err(format!("internal error while {what}: {}", panic_text(&e))))
}

/// A signature to make: the record, who signs it and why, with which key, and where the
/// signed summary goes.
pub struct SignJob {
    /// The remembered private key.
    pub key: PathBuf,
    /// The record to sign (its analysis time is set when signing).
    pub record: Record,
    /// Printed name of the signer.
    pub signer: String,
    /// Meaning of the signature.
    pub meaning: Meaning,
    /// The signer's comment.
    pub comment: String,
    /// The passphrase typed for a protected key (kept only until the key is opened).
    pub passphrase: Option<String>,
    /// File name a save dialog suggests.
    pub suggested_name: String,
    /// Where to save (none: a save dialog asks).
    pub to: Option<PathBuf>,
}

/// A signature to add to a signed summary, which is rewritten in place.
pub struct AddJob {
    /// The remembered private key.
    pub key: PathBuf,
    /// The passphrase typed for a protected key (kept only until the key is opened).
    pub passphrase: Option<String>,
    /// Who signs, when (set when signing), why, and the comment.
    pub signer: String,
    /// Meaning of the signature.
    pub meaning: Meaning,
    /// The signer's comment.
    pub comment: String,
    /// The signed summary.
    pub summary: PathBuf,
}

impl Worker {
    /// Reads files for `slot` in the background.
    pub fn load(&mut self, slot: Slot, sources: Vec<Source>) {
        let out = self.begin(Ends::Load);
        std::thread::spawn(move || {
            let options = LoadOptions::default();
            let result = guarded("reading", || {
                if sources.len() == 2 {
                    // Both lots are parsed in parallel.
                    std::thread::scope(|s| {
                        let h = s.spawn(|| load_source(&sources[0], &options));
                        let b = load_source(&sources[1], &options);
                        let a = h.join().unwrap_or_else(|e| Err(panic_text(&e)));
                        Ok(vec![a?, b?])
                    })
                } else {
                    sources.iter().map(|s| load_source(s, &options)).collect()
                }
            });
            out.send(Outcome::Loaded { slot, result }, Ends::Load);
        });
    }

    /// Reads both lots from a database in the background (`password` is passed to the
    /// connection only).
    pub fn load_database(&mut self, source: QuerySource, password: Option<String>) {
        let out = self.begin(Ends::Load);
        std::thread::spawn(move || {
            let result = guarded("reading the database", || {
                crate::source::load_lots(&source, password.as_deref(), &LoadOptions::default())
                    .map(Vec::from)
                    .map_err(|e| e.to_string())
            });
            out.send(
                Outcome::DatabaseLoaded {
                    source: Box::new(source),
                    result,
                },
                Ends::Load,
            );
        });
    }

    /// Compares inside a database in the background, the first time from the form: the
    /// outcome replaces nothing until the app takes it.
    pub fn try_database(&mut self, job: DatabaseJob) {
        let out = self.begin(Ends::Load);
        std::thread::spawn(move || {
            let result = guarded("comparing inside the database", || job.run());
            out.send(
                Outcome::DatabaseCompared {
                    source: Box::new(job.source),
                    result,
                },
                Ends::Load,
            );
        });
    }

    /// Opens a native file dialog in the background (the window keeps drawing meanwhile).
    pub fn pick(&mut self, slot: Slot) {
        let out = self.begin(Ends::Nothing);
        std::thread::spawn(move || {
            let dialog = rfd::FileDialog::new()
                .set_title(match slot {
                    Slot::Reference => "Open the reference lot",
                    Slot::Candidate => "Open the candidate lot",
                    Slot::Both => "Open two lot files (reference first)",
                    Slot::Combined => "Open one file holding both lots",
                })
                .add_filter(
                    "Lot files",
                    &[
                        "csv", "tsv", "txt", "xlsx", "xlsm", "xlsb", "xls", "ods", "parquet",
                    ],
                )
                .add_filter("All files", &["*"]);
            let paths = if slot == Slot::Both {
                dialog.pick_files().unwrap_or_default()
            } else {
                dialog.pick_file().into_iter().collect()
            };
            out.send(Outcome::Picked { slot, paths }, Ends::Nothing);
        });
    }

    /// Opens a dialog for a key, a key folder, a summary or a specification, in the
    /// background.
    pub fn choose(&mut self, purpose: Purpose) {
        let out = self.begin(Ends::Nothing);
        std::thread::spawn(move || {
            let path = match purpose {
                Purpose::SigningKey => rfd::FileDialog::new()
                    .set_title("Choose your private signing key")
                    .add_filter("PEM key", &["pem"])
                    .pick_file(),
                Purpose::KeyFolder => rfd::FileDialog::new()
                    .set_title("Folder for the new signing key")
                    .pick_folder(),
                Purpose::Summary => rfd::FileDialog::new()
                    .set_title("Open a signed summary")
                    .add_filter("JSON", &["json"])
                    .pick_file(),
                Purpose::SummaryToSign => rfd::FileDialog::new()
                    .set_title("Open the signed summary or protocol to add your signature to")
                    .add_filter("JSON", &["json"])
                    .pick_file(),
                Purpose::Specification => rfd::FileDialog::new()
                    .set_title("Open a specification file (limits and margins)")
                    .add_filter(
                        "Specification files",
                        &["csv", "tsv", "txt", "xlsx", "xlsm", "xlsb", "xls", "ods"],
                    )
                    .add_filter("All files", &["*"])
                    .pick_file(),
                Purpose::Protocol => rfd::FileDialog::new()
                    .set_title("Open a comparison protocol")
                    .add_filter("JSON", &["json"])
                    .pick_file(),
            };
            out.send(Outcome::Chosen { purpose, path }, Ends::Nothing);
        });
    }

    /// Writes `contents` atomically to `to` or, without one, where a save dialog (in the
    /// background) says. A write to a given path counts as work under way (a dialog does
    /// not: it may be cancelled, and then nothing arrives).
    pub fn export(&mut self, suggested_name: String, contents: String, to: Option<PathBuf>) {
        let ends = if to.is_some() {
            Ends::Save
        } else {
            Ends::Nothing
        };
        let out = self.begin(ends);
        std::thread::spawn(move || {
            let picked = to.or_else(|| {
                rfd::FileDialog::new()
                    .set_title("Export the comparison record")
                    .set_file_name(&suggested_name)
                    .add_filter("JSON", &["json"])
                    .save_file()
            });
            if let Some(path) = picked {
                let result = crate::report::write_atomic(&path, contents.as_bytes())
                    .map(|()| path)
                    .map_err(|e| format!("the record was not written: {e}"));
                out.send(Outcome::Exported(result), ends);
            }
        });
    }

    /// Reads a specification file in the background. A file that cannot be read, or whose
    /// content is wrong, arrives as the loader's message (file, row, column); nothing panics.
    pub fn load_spec(&mut self, path: PathBuf) {
        let out = self.begin(Ends::Load);
        std::thread::spawn(move || {
            let result = catch_unwind(AssertUnwindSafe(|| {
                data::spec::load_spec(&path, &LoadOptions::default()).map_err(|e| e.to_string())
            }))
            .unwrap_or_else(|e| {
                Err(format!(
                    "{}: internal error while reading: {}",
                    path.display(),
                    panic_text(&e)
                ))
            });
            out.send(Outcome::SpecLoaded(result), Ends::Load);
        });
    }

    /// Writes specification rows as CSV ([`data::spec::to_csv`]) atomically, to `path` or,
    /// without one, where a save dialog (in the background) says. Delivers the file as
    /// saved: its path and name, the SHA-256 of the bytes written, and the rows.
    pub fn save_spec(&mut self, suggested_name: String, rows: Vec<SpecRow>, path: Option<PathBuf>) {
        // A save to a given path counts as work under way (a dialog does not: it may be
        // cancelled, and then nothing arrives).
        let ends = if path.is_some() {
            Ends::Save
        } else {
            Ends::Nothing
        };
        let out = self.begin(ends);
        std::thread::spawn(move || {
            let picked = path.or_else(|| {
                rfd::FileDialog::new()
                    .set_title("Save the specification")
                    .set_file_name(&suggested_name)
                    .add_filter("CSV", &["csv"])
                    .save_file()
            });
            let Some(path) = picked else { return };
            let text = data::spec::to_csv(&rows);
            let result = crate::report::write_atomic(&path, text.as_bytes())
                .map(|()| {
                    let shown = path.display().to_string();
                    Spec {
                        file_name: path
                            .file_name()
                            .map_or_else(|| shown.clone(), |n| n.to_string_lossy().into_owned()),
                        path: shown,
                        sha256: sha256_hex(text.as_bytes()),
                        rows,
                    }
                })
                .map_err(|e| format!("the specification was not written: {e}"));
            out.send(Outcome::SpecSaved(result), ends);
        });
    }

    /// Looks whether the remembered signing key at `path` is there, and reads the printed
    /// name stored beside it.
    pub fn look_up_key(&mut self, path: String) {
        let out = self.begin(Ends::Job);
        std::thread::spawn(move || {
            let found = guarded("looking at the signing key", || {
                let p = Path::new(&path);
                let protected = sign::read_key_file(p).ok().map(|k| k.is_protected());
                Ok((p.exists(), sign::signer_beside(p), protected))
            });
            let (exists, signer, protected) = found.unwrap_or((false, None, None));
            out.send(
                Outcome::KeyLooked {
                    path,
                    exists,
                    signer,
                    protected,
                },
                Ends::Job,
            );
        });
    }

    /// Reads a chosen private signing key (to check it is one) and the printed name beside it.
    pub fn read_key(&mut self, path: PathBuf) {
        let out = self.begin(Ends::Job);
        std::thread::spawn(move || {
            let result = guarded("reading the signing key", || {
                let protected = sign::read_key_file(&path)
                    .map_err(|e| e.to_string())?
                    .is_protected();
                let signer = sign::signer_beside(&path);
                Ok((path, signer, protected))
            });
            out.send(Outcome::KeyRead(result), Ends::Job);
        });
    }

    /// Makes a new signing key for `signer` in `folder`, protected by `passphrase`.
    pub fn create_key(&mut self, folder: PathBuf, signer: String, passphrase: String) {
        let out = self.begin(Ends::Job);
        std::thread::spawn(move || {
            let result = guarded("creating the signing key", || {
                sign::keygen(&folder, "lotshift-signing-key", &signer, &passphrase)
                    .map_err(|e| e.to_string())
            });
            out.send(Outcome::KeyCreated(result), Ends::Job);
        });
    }

    /// Signs a record with the key, then saves the signed summary (to the path given, or
    /// where a save dialog says). Delivers [`Outcome::Signed`] once signed (and, with a path
    /// given, written) and [`Outcome::Exported`] once written.
    pub fn sign(&mut self, job: SignJob) {
        let out = self.begin(Ends::Job);
        std::thread::spawn(move || {
            let signed = guarded("signing", || {
                let key = sign::read_signing_key(&job.key, job.passphrase.as_deref())
                    .map_err(|e| e.to_string())?;
                let mut record = job.record;
                record.analysed_at = Some(sign::now_rfc3339());
                let record = serde_json::to_value(&record).map_err(|e| e.to_string())?;
                let m = sign::Manifestation {
                    signer: job.signer.clone(),
                    signed_at: sign::now_rfc3339(),
                    meaning: job.meaning,
                    comment: job.comment.clone(),
                };
                sign::first_signature(record, &key, &m).map_err(|e| e.to_string())
            });
            let summary = match signed {
                Ok(s) => s,
                Err(e) => return out.send(Outcome::Signed(Err(e)), Ends::Job),
            };
            let json = summary.to_json();
            match job.to {
                // Written first, so that the job ends with everything delivered.
                Some(path) => {
                    let result = crate::report::write_atomic(&path, json.as_bytes())
                        .map(|()| path)
                        .map_err(|e| format!("the record was not written: {e}"));
                    out.send(Outcome::Exported(result), Ends::Nothing);
                    out.send(Outcome::Signed(Ok(job.signer)), Ends::Job);
                }
                None => {
                    out.send(Outcome::Signed(Ok(job.signer)), Ends::Job);
                    let picked = rfd::FileDialog::new()
                        .set_title("Export the comparison record")
                        .set_file_name(&job.suggested_name)
                        .add_filter("JSON", &["json"])
                        .save_file();
                    if let Some(path) = picked {
                        let result = crate::report::write_atomic(&path, json.as_bytes())
                            .map(|()| path)
                            .map_err(|e| format!("the record was not written: {e}"));
                        out.send(Outcome::Exported(result), Ends::Nothing);
                    }
                }
            }
        });
    }

    /// Adds a signature to a signed summary whose signatures verify, and rewrites the file
    /// atomically (a summary that does not verify is refused and left as it is).
    pub fn add_signature(&mut self, job: AddJob) {
        let out = self.begin(Ends::Job);
        std::thread::spawn(move || {
            let result = guarded("adding the signature", || {
                let path = &job.summary;
                let text = std::fs::read_to_string(path)
                    .map_err(|e| format!("{}: {e}", path.display()))?;
                let schema = serde_json::from_str::<serde_json::Value>(&text)
                    .ok()
                    .and_then(|v| v.get("schema").and_then(|s| s.as_str()).map(str::to_string));
                if schema.as_deref() == Some(crate::protocol::PROTOCOL_SCHEMA) {
                    return sign_protocol(&job);
                }
                // Refused before the key is opened when the signatures there do not verify.
                sign::verify_sequence(&text).map_err(|e| {
                    format!(
                        "{}: not signed: its signatures do not verify ({e})",
                        path.display()
                    )
                })?;
                let key = sign::read_signing_key(&job.key, job.passphrase.as_deref())
                    .map_err(|e| e.to_string())?;
                let m = sign::Manifestation {
                    signer: job.signer.clone(),
                    signed_at: sign::now_rfc3339(),
                    meaning: job.meaning,
                    comment: job.comment.clone(),
                };
                let (json, summary) =
                    sign::add_signature(path, &text, &key, &m).map_err(|e| e.to_string())?;
                crate::report::write_atomic(path, json.as_bytes())
                    .map_err(|e| format!("the signed summary was not written: {e}"))?;
                let mut note = format!(
                    "Signature {} ({} by {}) added to {}.",
                    summary.signatures.len(),
                    job.meaning,
                    job.signer,
                    path.display()
                );
                for n in sign::order_notes(&summary.signatures) {
                    note.push_str(&format!(" Note: {n}."));
                }
                Ok(note)
            });
            out.send(Outcome::SignatureAdded(result), Ends::Job);
        });
    }

    /// Checks a signed summary's signature and, when `loaded` (the SHA-256 of the loaded lots)
    /// are the files it names, its numbers against `current` (the current result's record).
    pub fn check_summary(&mut self, path: PathBuf, loaded: Vec<String>, current: Option<Record>) {
        let out = self.begin(Ends::Job);
        std::thread::spawn(move || {
            let result = guarded("checking the signed summary", || {
                summary_note(&path, &loaded, current.as_ref())
            });
            out.send(Outcome::SummaryChecked(result), Ends::Job);
        });
    }
}

/// Adds the job's signature to the comparison protocol at `job.summary`, in the signatures
/// file beside it (the protocol must be usable and its signatures must verify).
fn sign_protocol(job: &AddJob) -> Result<String, String> {
    use crate::report::protocol_sign;
    let path = &job.summary;
    let p = crate::protocol::load(path).map_err(|e| e.to_string())?;
    let key =
        sign::read_signing_key(&job.key, job.passphrase.as_deref()).map_err(|e| e.to_string())?;
    let m = sign::Manifestation {
        signer: job.signer.clone(),
        signed_at: sign::now_rfc3339(),
        meaning: job.meaning,
        comment: job.comment.clone(),
    };
    let signed =
        protocol_sign::add(&p.sha256, &p.signatures, &key, &m).map_err(|e| e.to_string())?;
    let out = protocol_sign::signatures_path(path);
    let json = serde_json::to_string_pretty(&signed).map_err(|e| e.to_string())?;
    crate::report::write_atomic(&out, json.as_bytes())
        .map_err(|e| format!("the protocol's signatures were not written: {e}"))?;
    let mut note = format!(
        "Signature {} ({} by {}) added to the protocol {} (in {}).",
        signed.signatures.len(),
        job.meaning,
        job.signer,
        path.display(),
        out.display()
    );
    for n in sign::order_notes(&signed.signatures) {
        note.push_str(&format!(" Note: {n}."));
    }
    Ok(note)
}

/// What checking the signed summary at `path` finds, in words: the signature, whether the
/// loaded lots are the files it names, and whether the current result has its numbers.
///
/// # Errors
/// The file cannot be read, or the summary does not verify ("NOT VERIFIED").
pub fn summary_note(
    path: &Path,
    loaded: &[String],
    current: Option<&Record>,
) -> Result<String, String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let s = sign::verify_signature(&text, None)
        .map_err(|e| format!("{}: NOT VERIFIED: {e}", path.display()))?;
    let mut note = match s.signatures.as_slice() {
        [sig] => format!(
            "{}: signature valid — signed by {} on {} UTC, meaning {}, key {}.",
            path.display(),
            sig.signer,
            sig.signed_at,
            sig.meaning,
            sig.key_fingerprint
        ),
        all => format!(
            "{}: {} signatures valid, in sequence — {}.",
            path.display(),
            all.len(),
            all.iter()
                .enumerate()
                .map(|(k, sig)| format!(
                    "{}: signed by {} on {} UTC, meaning {}",
                    k + 1,
                    sig.signer,
                    sig.signed_at,
                    sig.meaning
                ))
                .collect::<Vec<_>>()
                .join("; ")
        ),
    };
    for n in sign::order_notes(&s.signatures) {
        note.push_str(&format!(" Note: {n}."));
    }
    note.push_str(
        " Who signed is checked against the trusted-signers list by lotshift verify --trusted.",
    );
    let recorded: Vec<String> = s.record["lots"]
        .as_array()
        .into_iter()
        .flatten()
        .map(|l| l["sha256"].as_str().unwrap_or_default().to_string())
        .collect();
    if s.record["schema"].as_str() == Some(crate::report::SCHEMA_V1) {
        note.push_str(" It was written by an earlier release (record schema /1, differences as reference − candidate): use lotshift verify to recompute its numbers.");
    } else if loaded.len() == 2 && recorded == loaded {
        match current {
            Some(record) => {
                let now = serde_json::to_value(record).unwrap_or_default();
                match sign::first_difference(&s.record, &now) {
                    None => note.push_str(" The loaded lots are the files it names, and every number matches the current result."),
                    Some(d) => note.push_str(&format!(" The loaded lots are the files it names, but the current result differs (check the settings and characteristics): {d}")),
                }
            }
            None => note.push_str(" The loaded lots are the files it names (SHA-256 match)."),
        }
    } else {
        note.push_str(" The loaded lots are not the files it names; load them to compare the numbers, or use lotshift verify.");
    }
    Ok(note)
}
