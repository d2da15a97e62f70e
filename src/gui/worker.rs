//! Background work for the window: loading files and running comparisons off the UI thread,
//! with progress, cancellation, panic capture, and a run number so that a result from an old
//! run never replaces a newer one.

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender, channel};
use std::sync::{Arc, Mutex};

use crate::analysis::{self, Comparison, Progress, Settings};
use crate::data::spec::{Spec, SpecRow};
use crate::data::{self, LoadOptions, Lot, Selection};
use crate::pipeline::{self, Request, SpecRequest};
use crate::report::Record;

use super::shown::Shown;

/// Which lot slot a load fills.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Slot {
    /// The reference lot (first; differences are reference minus candidate).
    Reference,
    /// The candidate lot.
    Candidate,
    /// Both lots at once, from two files in that order.
    Both,
    /// One file holding both lots, to be split by a lot column.
    Combined,
}

/// What a non-lot file dialog is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Purpose {
    /// Choose an existing private signing key.
    SigningKey,
    /// Choose a folder to create a signing key in.
    KeyFolder,
    /// Choose a signed summary to check.
    Summary,
    /// Choose a specification file (limits and margins) to load.
    Specification,
}

/// What a file to load is.
#[derive(Debug, Clone)]
pub enum Source {
    /// A file on disk.
    Path(PathBuf),
    /// Bytes built into the program (the sample lots), with the name to show.
    Embedded(&'static str, &'static [u8]),
}

/// A finished piece of background work.
pub enum Outcome {
    /// Files read (or the reason they could not be).
    Loaded {
        /// Slot the files were for.
        slot: Slot,
        /// The lots, in slot order.
        result: Result<Vec<Lot>, String>,
    },
    /// A comparison finished (or failed, or was cancelled).
    Compared {
        /// Run number.
        run: u64,
        /// The result bundle or the reason there is none.
        result: Result<Box<Shown>, String>,
        /// False for the first delivery of a run that still computes its permutation p-value.
        last: bool,
    },
    /// The record was written (or not).
    Exported(Result<PathBuf, String>),
    /// A dialog for something other than lots closed.
    Chosen {
        /// What the dialog was for.
        purpose: Purpose,
        /// The chosen path (none when cancelled).
        path: Option<PathBuf>,
    },
    /// A specification file was read (or the loader's message naming file, row and column).
    SpecLoaded(Result<Spec, String>),
    /// The specification was written: the file as saved (its name, the SHA-256 of the bytes
    /// written, the rows), or why not.
    SpecSaved(Result<Spec, String>),
    /// The file dialog closed.
    Picked {
        /// Slot the dialog was for.
        slot: Slot,
        /// Chosen files (empty when cancelled).
        paths: Vec<PathBuf>,
    },
}

/// Progress and cancellation of one run, shared with its thread.
#[derive(Debug)]
pub struct RunHandle {
    /// Run number.
    pub id: u64,
    cancel: AtomicBool,
    stage: Mutex<(String, f64)>,
    repaint: Option<egui::Context>,
}

impl Progress for RunHandle {
    fn report(&self, stage: &str, fraction: f64) {
        if let Ok(mut s) = self.stage.lock() {
            *s = (stage.to_string(), fraction);
        }
        if let Some(ctx) = &self.repaint {
            ctx.request_repaint();
        }
    }
    fn cancelled(&self) -> bool {
        self.cancel.load(Ordering::Relaxed)
    }
}

/// The window's background worker.
pub struct Worker {
    tx: Sender<Outcome>,
    rx: Receiver<Outcome>,
    ctx: Option<egui::Context>,
    latest_run: u64,
    active: Option<Arc<RunHandle>>,
    loads_pending: usize,
    saves_pending: usize,
}

fn panic_text(e: &Box<dyn std::any::Any + Send>) -> String {
    e.downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| e.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "unknown failure".into())
}

/// Lower-case hex SHA-256 of `bytes` (as the loaders record a file's).
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest as _;
    data::hex(&sha2::Sha256::digest(bytes))
}

fn load_source(src: &Source, options: &LoadOptions) -> Result<Lot, String> {
    match src {
        Source::Path(p) => data::load(p, options),
        Source::Embedded(name, bytes) => data::load_bytes(name, bytes, options),
    }
    .map_err(|e| e.to_string())
}

impl Worker {
    /// A worker that asks `ctx` (when given) to repaint whenever something finishes.
    pub fn new(ctx: Option<egui::Context>) -> Self {
        let (tx, rx) = channel();
        Worker {
            tx,
            rx,
            ctx,
            latest_run: 0,
            active: None,
            loads_pending: 0,
            saves_pending: 0,
        }
    }

    fn send(tx: &Sender<Outcome>, ctx: &Option<egui::Context>, o: Outcome) {
        let _ = tx.send(o);
        if let Some(c) = ctx {
            c.request_repaint();
        }
    }

    /// Reads files for `slot` in the background.
    pub fn load(&mut self, slot: Slot, sources: Vec<Source>) {
        self.loads_pending += 1;
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
        std::thread::spawn(move || {
            let options = LoadOptions::default();
            let result = catch_unwind(AssertUnwindSafe(|| {
                let lots: Result<Vec<Lot>, String> = if sources.len() == 2 {
                    // Both lots are parsed in parallel.
                    std::thread::scope(|s| {
                        let h = s.spawn(|| load_source(&sources[0], &options));
                        let b = load_source(&sources[1], &options);
                        let a = h.join().unwrap_or_else(|e| Err(panic_text(&e)));
                        Ok(vec![a?, b?])
                    })
                } else {
                    sources.iter().map(|s| load_source(s, &options)).collect()
                };
                lots
            }))
            .unwrap_or_else(|e| Err(format!("internal error while reading: {}", panic_text(&e))));
            Self::send(&tx, &ctx, Outcome::Loaded { slot, result });
        });
    }

    /// Opens a native file dialog in the background (the window keeps drawing meanwhile).
    pub fn pick(&mut self, slot: Slot) {
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
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
                    &["csv", "tsv", "txt", "xlsx", "xlsm", "xlsb", "xls", "ods"],
                )
                .add_filter("All files", &["*"]);
            let paths = if slot == Slot::Both {
                dialog.pick_files().unwrap_or_default()
            } else {
                dialog.pick_file().into_iter().collect()
            };
            Self::send(&tx, &ctx, Outcome::Picked { slot, paths });
        });
    }

    /// Opens a dialog for a key, a key folder or a summary, in the background.
    pub fn choose(&mut self, purpose: Purpose) {
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
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
                Purpose::Specification => rfd::FileDialog::new()
                    .set_title("Open a specification file (limits and margins)")
                    .add_filter(
                        "Specification files",
                        &["csv", "tsv", "txt", "xlsx", "xlsm", "xlsb", "xls", "ods"],
                    )
                    .add_filter("All files", &["*"])
                    .pick_file(),
            };
            Self::send(&tx, &ctx, Outcome::Chosen { purpose, path });
        });
    }

    /// Asks where to save `contents` (a native dialog, in the background) and writes it there
    /// atomically.
    pub fn export(&mut self, suggested_name: String, contents: String) {
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
        std::thread::spawn(move || {
            let picked = rfd::FileDialog::new()
                .set_title("Export the comparison record")
                .set_file_name(&suggested_name)
                .add_filter("JSON", &["json"])
                .save_file();
            if let Some(path) = picked {
                let result = crate::report::write_atomic(&path, contents.as_bytes())
                    .map(|()| path)
                    .map_err(|e| format!("the record was not written: {e}"));
                Self::send(&tx, &ctx, Outcome::Exported(result));
            }
        });
    }

    /// Reads a specification file in the background. A file that cannot be read, or whose
    /// content is wrong, arrives as the loader's message (file, row, column); nothing panics.
    pub fn load_spec(&mut self, path: PathBuf) {
        self.loads_pending += 1;
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
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
            Self::send(&tx, &ctx, Outcome::SpecLoaded(result));
        });
    }

    /// Writes specification rows as CSV ([`data::spec::to_csv`]) atomically, to `path` or,
    /// without one, where a save dialog (in the background) says. Delivers the file as
    /// saved: its path and name, the SHA-256 of the bytes written, and the rows.
    pub fn save_spec(&mut self, suggested_name: String, rows: Vec<SpecRow>, path: Option<PathBuf>) {
        // A save to a given path counts as work under way (a dialog does not: it may be
        // cancelled, and then nothing arrives).
        if path.is_some() {
            self.saves_pending += 1;
        }
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
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
            Self::send(&tx, &ctx, Outcome::SpecSaved(result));
        });
    }

    /// Starts a comparison, cancelling any run still going. Returns its run number.
    pub fn compare(&mut self, lots: [Arc<Lot>; 2], request: Request) -> u64 {
        self.cancel();
        self.latest_run += 1;
        let handle = Arc::new(RunHandle {
            id: self.latest_run,
            cancel: AtomicBool::new(false),
            stage: Mutex::new(("starting".into(), 0.0)),
            repaint: self.ctx.clone(),
        });
        self.active = Some(handle.clone());
        let tx = self.tx.clone();
        let ctx = self.ctx.clone();
        std::thread::spawn(move || {
            let deliver = |result: Result<Box<Shown>, String>, last: bool| {
                Self::send(
                    &tx,
                    &ctx,
                    Outcome::Compared {
                        run: handle.id,
                        result,
                        last,
                    },
                );
            };
            let outcome = catch_unwind(AssertUnwindSafe(|| {
                run_comparison_staged(&lots, &request, &*handle, &|first| {
                    deliver(Ok(first), false)
                })
            }))
            .unwrap_or_else(|e| {
                Err(format!(
                    "internal error in the analysis: {}",
                    panic_text(&e)
                ))
            });
            deliver(outcome, true);
        });
        self.latest_run
    }

    /// Cancels the running comparison, if any.
    pub fn cancel(&mut self) {
        if let Some(h) = self.active.take() {
            h.cancel.store(true, Ordering::Relaxed);
        }
    }

    /// Stage and fraction of the running comparison.
    pub fn progress(&self) -> Option<(String, f64)> {
        self.active
            .as_ref()
            .and_then(|h| h.stage.lock().ok().map(|s| s.clone()))
    }

    /// True while a comparison or a load is under way.
    pub fn busy(&self) -> bool {
        self.active.is_some() || self.loads_pending > 0 || self.saves_pending > 0
    }

    /// Finished work, oldest first; results of superseded runs are dropped here.
    pub fn poll(&mut self) -> Vec<Outcome> {
        let mut out = Vec::new();
        while let Ok(o) = self.rx.try_recv() {
            match &o {
                Outcome::Compared { run, last, .. } => {
                    if *run != self.latest_run {
                        continue;
                    }
                    if *last {
                        self.active = None;
                    }
                }
                Outcome::Loaded { .. } | Outcome::SpecLoaded(_) => {
                    self.loads_pending = self.loads_pending.saturating_sub(1);
                }
                Outcome::SpecSaved(_) => {
                    self.saves_pending = self.saves_pending.saturating_sub(1);
                }
                Outcome::Picked { .. } | Outcome::Exported(_) | Outcome::Chosen { .. } => {}
            }
            out.push(o);
        }
        out
    }

    /// Blocks until one outcome arrives (for tests and the screenshot mode).
    pub fn wait(&mut self, timeout: std::time::Duration) -> Vec<Outcome> {
        match self.rx.recv_timeout(timeout) {
            Ok(o) => {
                // Put it back through the same filter as poll.
                let _ = self.tx.send(o);
                self.poll()
            }
            Err(_) => Vec::new(),
        }
    }
}

/// Prepares, compares and builds everything the views draw, in one go.
///
/// # Errors
/// The reason in words (bad selection, engine error, cancellation).
pub fn run_comparison(
    lots: &[Arc<Lot>; 2],
    selection: &Selection,
    settings: &Settings,
    progress: &dyn Progress,
) -> Result<Box<Shown>, String> {
    let request = Request {
        selection: selection.clone(),
        settings: settings.clone(),
        spec: SpecRequest::default(),
        strict_columns: false,
        exclusions: Vec::new(),
    };
    run_comparison_staged(lots, &request, progress, &|_| {})
}

/// As [`run_comparison`], for a whole request (with its specification), and when a
/// permutation p-value is asked for, hands the result without it to `first` as soon as it
/// exists, then computes the permutations.
///
/// # Errors
/// As [`run_comparison`].
pub fn run_comparison_staged(
    lots: &[Arc<Lot>; 2],
    request: &Request,
    progress: &dyn Progress,
    first: &dyn Fn(Box<Shown>),
) -> Result<Box<Shown>, String> {
    progress.report("matching columns", 0.0);
    let settings = &request.settings;
    let prepared = Arc::new(pipeline::prepare_shared(lots, request).map_err(|e| e.to_string())?);
    let quick = Settings {
        permutations: 0,
        ..settings.clone()
    };
    let mut c = pipeline::run_prepared(lots, &prepared, request, &quick, progress)
        .map_err(|e| e.to_string())?;
    let bundle = |c: Comparison| {
        let record = Record::new(&c, Some((&*prepared, [&lots[0], &lots[1]])));
        let mut shown = Shown::new(c, prepared.clone(), lots.clone(), record);
        shown.requested_permutations = settings.permutations;
        Box::new(shown)
    };
    if settings.permutations == 0 {
        return Ok(bundle(c));
    }
    first(bundle(c.clone()));
    analysis::add_permutation(
        &mut c,
        [&prepared.lots[0].data, &prepared.lots[1].data],
        settings,
        progress,
    )
    .map_err(|e| e.to_string())?;
    Ok(bundle(c))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::Duration;

    fn sample_lots() -> [Arc<Lot>; 2] {
        let a = data::load_bytes(
            "a.csv",
            b"x,y\n1,2\n2,1\n3,5\n4,3\n5,4\n",
            &LoadOptions::default(),
        )
        .unwrap();
        let b = data::load_bytes(
            "b.csv",
            b"x,y\n2,2\n3,4\n4,3\n6,6\n5,7\n",
            &LoadOptions::default(),
        )
        .unwrap();
        [Arc::new(a), Arc::new(b)]
    }

    #[test]
    fn a_newer_run_always_wins() {
        // Start two runs back to back; only the second may be delivered.
        let mut w = Worker::new(None);
        let lots = sample_lots();
        let first = w.compare(lots.clone(), Request::default());
        let second = w.compare(
            lots,
            Request {
                settings: Settings {
                    alpha: 0.01,
                    ..Settings::default()
                },
                ..Request::default()
            },
        );
        assert!(second > first);
        let mut got = Vec::new();
        let deadline = std::time::Instant::now() + Duration::from_secs(20);
        while got.is_empty() && std::time::Instant::now() < deadline {
            for o in w.wait(Duration::from_millis(200)) {
                if let Outcome::Compared { run, result, last } = o {
                    assert_eq!(run, second, "only the newest run is delivered");
                    if last {
                        got.push((run, result.map(|s| s.comparison.alpha)));
                    }
                }
            }
        }
        // Give the first run's thread time to deliver too: it must still be dropped.
        std::thread::sleep(Duration::from_millis(200));
        for o in w.poll() {
            if let Outcome::Compared { run, result, last } = o {
                assert_eq!(run, second, "only the newest run is delivered");
                if last {
                    got.push((run, result.map(|s| s.comparison.alpha)));
                }
            }
        }
        assert_eq!(got.len(), 1, "exactly one result delivered");
        assert_eq!(got[0].0, second);
        assert_eq!(got[0].1, Ok(0.01));
        assert!(!w.busy());
    }

    #[test]
    fn a_failing_run_reports_instead_of_crashing() {
        let mut w = Worker::new(None);
        let lots = sample_lots();
        let sel = Selection {
            only: Some(vec!["nonexistent".into()]),
            exclude: vec![],
        };
        w.compare(
            lots,
            Request {
                selection: sel,
                ..Request::default()
            },
        );
        let deadline = std::time::Instant::now() + Duration::from_secs(20);
        loop {
            let outs = w.wait(Duration::from_millis(200));
            if let Some(Outcome::Compared { result, .. }) = outs.into_iter().next() {
                let err = result.err().expect("an error");
                assert!(err.contains("nonexistent"), "{err}");
                break;
            }
            assert!(std::time::Instant::now() < deadline, "no result");
        }
    }
}
