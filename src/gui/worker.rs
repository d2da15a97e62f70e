//! Background work for the window: comparisons off the UI thread, with progress,
//! cancellation, panic capture, and a run number so that a result from an old run never
//! replaces a newer one; and the channel every other background job
//! (module `jobs`: files, dialogs, keys, signatures) delivers its [`Outcome`] through,
//! with the count of work under way.

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, channel};
use std::sync::{Arc, Mutex};

use crate::analysis::{self, Comparison, Progress, Settings};
use crate::data::spec::Spec;
use crate::data::{self, Lot, Prepared, Selection};
use crate::pipeline::{self, Request, SpecRequest};
use crate::report::Record;
use crate::source::QuerySource;
use crate::source::aggregate::{self, Choice};

use super::shown::{MAX_POINTS, Shown, stable_sample};

/// Which lot slot a load fills.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Slot {
    /// The reference lot (first; differences are candidate minus reference).
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
    /// Choose a signed summary to add a signature to.
    SummaryToSign,
    /// Choose a specification file (limits and margins) to load.
    Specification,
    /// Choose a comparison protocol to run under.
    Protocol,
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
    /// Both lots were read from a database (or the one-line reason they could not be).
    DatabaseLoaded {
        /// The source read, as the form named it.
        source: Box<QuerySource>,
        /// Reference and candidate.
        result: Result<Vec<Lot>, String>,
    },
    /// The first comparison inside a database from the form finished (or why not; then
    /// nothing in the window changes but the message).
    DatabaseCompared {
        /// The source compared.
        source: Box<QuerySource>,
        /// The result bundle.
        result: Result<Box<Shown>, String>,
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
    /// A remembered signing key was looked at: whether it is there, and the printed name
    /// stored beside it.
    KeyLooked {
        /// The key's path as remembered.
        path: String,
        /// The file is there.
        exists: bool,
        /// The printed name beside it, if any.
        signer: Option<String>,
        /// Whether the key is protected by a passphrase (none: not known, e.g. not readable).
        protected: Option<bool>,
    },
    /// A chosen signing key was read: its path, the printed name beside it and whether it is
    /// protected by a passphrase, or why it cannot be used.
    KeyRead(Result<(PathBuf, Option<String>, bool), String>),
    /// A new signing key was made: the private key's path, or why not.
    KeyCreated(Result<PathBuf, String>),
    /// The record was signed (and is being saved): the printed name used, or why not.
    Signed(Result<String, String>),
    /// A signature was added to a signed summary and the file rewritten: what was done, in
    /// words, or why not (the file is then unchanged).
    SignatureAdded(Result<String, String>),
    /// A signed summary was checked: what was found (the signature valid), or the message
    /// (unreadable, NOT VERIFIED).
    SummaryChecked(Result<String, String>),
}

/// Which count of work under way an outcome ends.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Ends {
    /// None: the outcome of a dialog (which may be cancelled, and then nothing arrives), or a
    /// delivery of a run (runs are followed by their run number).
    Nothing,
    /// A file read.
    Load,
    /// A file written to a path given (not chosen in a dialog).
    Save,
    /// A key, signature or summary job.
    Job,
}

struct Envelope {
    outcome: Outcome,
    ends: Ends,
}

/// Where a background job delivers: the worker's channel, and a repaint request.
#[derive(Clone)]
pub(super) struct Deliver {
    tx: mpsc::Sender<Envelope>,
    ctx: Option<egui::Context>,
}

impl Deliver {
    /// Delivers `outcome`, which ends one piece of work counted as `ends`.
    pub(super) fn send(&self, outcome: Outcome, ends: Ends) {
        let _ = self.tx.send(Envelope { outcome, ends });
        if let Some(c) = &self.ctx {
            c.request_repaint();
        }
    }
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
    deliver: Deliver,
    rx: Receiver<Envelope>,
    latest_run: u64,
    active: Option<Arc<RunHandle>>,
    loads_pending: usize,
    saves_pending: usize,
    jobs_pending: usize,
}

/// A panic's message.
pub(super) fn panic_text(e: &Box<dyn std::any::Any + Send>) -> String {
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

impl Worker {
    /// A worker that asks `ctx` (when given) to repaint whenever something finishes.
    pub fn new(ctx: Option<egui::Context>) -> Self {
        let (tx, rx) = channel();
        Worker {
            deliver: Deliver { tx, ctx },
            rx,
            latest_run: 0,
            active: None,
            loads_pending: 0,
            saves_pending: 0,
            jobs_pending: 0,
        }
    }

    /// Counts one more piece of work under way as `ends` (an outcome sent with the same
    /// `ends` ends it), and gives the job its way to deliver.
    pub(super) fn begin(&mut self, ends: Ends) -> Deliver {
        match ends {
            Ends::Nothing => {}
            Ends::Load => self.loads_pending += 1,
            Ends::Save => self.saves_pending += 1,
            Ends::Job => self.jobs_pending += 1,
        }
        self.deliver.clone()
    }

    /// Starts a comparison, cancelling any run still going. Returns its run number.
    pub fn compare(&mut self, lots: [Arc<Lot>; 2], request: Request) -> u64 {
        self.cancel();
        self.latest_run += 1;
        let handle = Arc::new(RunHandle {
            id: self.latest_run,
            cancel: AtomicBool::new(false),
            stage: Mutex::new(("starting".into(), 0.0)),
            repaint: self.deliver.ctx.clone(),
        });
        self.active = Some(handle.clone());
        let out = self.begin(Ends::Nothing);
        std::thread::spawn(move || {
            let deliver = |result: Result<Box<Shown>, String>, last: bool| {
                out.send(
                    Outcome::Compared {
                        run: handle.id,
                        result,
                        last,
                    },
                    Ends::Nothing,
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

    /// Starts a comparison inside the database (a re-run of the source on screen),
    /// cancelling any run still going. Returns its run number.
    pub fn compare_in_database(&mut self, job: DatabaseJob) -> u64 {
        self.cancel();
        self.latest_run += 1;
        let handle = Arc::new(RunHandle {
            id: self.latest_run,
            cancel: AtomicBool::new(false),
            stage: Mutex::new(("computing inside the database".into(), 0.0)),
            repaint: self.deliver.ctx.clone(),
        });
        self.active = Some(handle.clone());
        let out = self.begin(Ends::Nothing);
        std::thread::spawn(move || {
            let result = catch_unwind(AssertUnwindSafe(|| job.run())).unwrap_or_else(|e| {
                Err(format!(
                    "internal error in the database comparison: {}",
                    panic_text(&e)
                ))
            });
            let result = if handle.cancelled() {
                Err("cancelled".into())
            } else {
                result
            };
            out.send(
                Outcome::Compared {
                    run: handle.id,
                    result,
                    last: true,
                },
                Ends::Nothing,
            );
        });
        self.latest_run
    }

    /// Makes every run under way out of date (its result is dropped when it arrives), as
    /// when a result from elsewhere replaces it.
    pub fn supersede(&mut self) {
        self.cancel();
        self.latest_run += 1;
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

    /// True while a comparison, a load or a save to a given path is under way.
    pub fn busy(&self) -> bool {
        self.active.is_some() || self.loads_pending > 0 || self.saves_pending > 0
    }

    /// Nothing under way at all (dialogs aside): not [`Self::busy`], and no job.
    pub fn idle(&self) -> bool {
        !self.busy() && self.jobs_pending == 0
    }

    /// Finished work, oldest first; results of superseded runs are dropped here.
    pub fn poll(&mut self) -> Vec<Outcome> {
        let mut out = Vec::new();
        while let Ok(e) = self.rx.try_recv() {
            if let Some(o) = self.receive(e) {
                out.push(o);
            }
        }
        out
    }

    fn receive(&mut self, e: Envelope) -> Option<Outcome> {
        match e.ends {
            Ends::Nothing => {}
            Ends::Load => self.loads_pending = self.loads_pending.saturating_sub(1),
            Ends::Save => self.saves_pending = self.saves_pending.saturating_sub(1),
            Ends::Job => self.jobs_pending = self.jobs_pending.saturating_sub(1),
        }
        if let Outcome::Compared { run, last, .. } = &e.outcome {
            if *run != self.latest_run {
                return None;
            }
            if *last {
                self.active = None;
            }
        }
        Some(e.outcome)
    }

    /// Blocks until one outcome arrives (for tests and the screenshot mode).
    pub fn wait(&mut self, timeout: std::time::Duration) -> Vec<Outcome> {
        match self.rx.recv_timeout(timeout) {
            Ok(e) => {
                let mut out: Vec<Outcome> = self.receive(e).into_iter().collect();
                out.extend(self.poll());
                out
            }
            Err(_) => Vec::new(),
        }
    }
}

/// A comparison inside a database: the source, the password typed in the form (kept in
/// memory only, never written anywhere), and what to compare how.
#[derive(Clone)]
pub struct DatabaseJob {
    /// The database, query, lot column and values.
    pub source: QuerySource,
    /// The password typed in the form (none: the environment variable, or none).
    pub password: Option<String>,
    /// The characteristics to leave out (by name or match key).
    pub exclude: Vec<String>,
    /// The analysis settings (what needs the units is switched off).
    pub settings: Settings,
    /// Specification and margins.
    pub spec: SpecRequest,
}

impl std::fmt::Debug for DatabaseJob {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("DatabaseJob")
            .field("source", &self.source)
            .field("password", &self.password.as_ref().map(|_| "•••"))
            .finish_non_exhaustive()
    }
}

impl DatabaseJob {
    /// Runs the aggregate statements and compares from the lots' summaries (as `compare
    /// --in-database` does), with the specification applied.
    ///
    /// # Errors
    /// The database's refusal or the engine's error, in one line (no password in it).
    pub fn run(&self) -> Result<Box<Shown>, String> {
        let settings = Settings {
            leave_one_out: false,
            permutations: 0,
            sequential: None,
            ..self.settings.clone()
        };
        let choice = Choice {
            only: None,
            exclude: self.exclude.clone(),
        };
        let outcome = aggregate::compare_in_database(
            &self.source,
            self.password.as_deref(),
            &data::LoadOptions::default(),
            &choice,
            &settings,
        )
        .map_err(|e| e.to_string())?;
        let mut c = outcome.comparison;
        if !self.spec.is_empty() {
            let given = self
                .spec
                .specification(&c.characteristics, &c.units)
                .map_err(|e| e.to_string())?;
            analysis::apply_specification(&mut c, &given, None).map_err(|e| e.to_string())?;
        }
        let record = aggregate::record(&c, &outcome.lots, &self.source);
        Ok(Box::new(Shown::from_database(
            c,
            record,
            outcome.lots,
            &self.source,
        )))
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
        ..Request::default()
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
    let mut prepared = pipeline::prepare_shared(lots, request).map_err(|e| e.to_string())?;
    add_session_pairings(&mut prepared, lots);
    let quick = Settings {
        permutations: 0,
        ..settings.clone()
    };
    // The engine takes the unit matrices over and centres them in place; the result keeps
    // only the units the views draw (the lots as read stay loaded for the next run): memory
    // holds the lots and one copy of their numbers, not three.
    let drawn = [0, 1].map(|g| stable_sample(prepared.lots[g].kept.len(), MAX_POINTS));
    let mut c = pipeline::run_prepared_owned(
        [&lots[0], &lots[1]],
        &mut prepared,
        [&drawn[0], &drawn[1]],
        request,
        &quick,
        progress,
    )
    .map_err(|e| e.to_string())?;
    let prepared = Arc::new(prepared);
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
    // The units once more for the relabellings (the same matching, so the same matrices),
    // centred in place.
    let again = pipeline::prepare_shared(lots, request).map_err(|e| e.to_string())?;
    let [a, b] = again.lots;
    analysis::add_permutation_owned(&mut c, [a.data, b.data], settings, progress)
        .map_err(|e| e.to_string())?;
    Ok(bundle(c))
}

/// Lists the columns the user paired in the window (the candidate lot's copy carries the
/// reference's name, its header as read) among the pairings the record shows: the data layer
/// lists pairs whose names differ, and a renamed column's name no longer does.
fn add_session_pairings(prepared: &mut Prepared, lots: &[Arc<Lot>; 2]) {
    for name in &prepared.characteristics {
        let key = data::match_key(name);
        let find = |lot: &Lot| {
            lot.columns
                .iter()
                .find(|c| c.is_numeric() && data::match_key(&c.name) == key)
                .map(|c| c.header.clone())
        };
        let (Some(reference), Some(candidate)) = (find(&lots[0]), find(&lots[1])) else {
            continue;
        };
        let as_read = data::split_header(&candidate).0;
        if data::match_key(&as_read) != key
            && !prepared.pairings.iter().any(|p| p.candidate == candidate)
        {
            prepared.pairings.push(data::Pairing {
                reference,
                candidate,
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::LoadOptions;
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
                        got.push((run, result.map(|s| s.comparison.alpha())));
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
                    got.push((run, result.map(|s| s.comparison.alpha())));
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
