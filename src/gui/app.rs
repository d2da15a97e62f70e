//! The application: the state the window holds (lots, result, views' state, messages,
//! background worker), the frame's layout, and the one place where [`Action`]s from panels
//! and views and [`Outcome`]s from the worker change that state.
//!
//! One job, one file (a little over 500 lines): every change of the window's state, from an
//! action or an outcome, is made here, so that it can be read in one place. What can live
//! elsewhere does: the panels and views (which only draw and ask), the lots
//! ([`super::lots`]), the result's state ([`super::state`]), the signing flow
//! ([`super::signing`]) and the background jobs ([`super::jobs`]).

use std::path::{Path, PathBuf};

use egui::RichText;

use crate::data::Lot;
use crate::data::spec::Spec;
use crate::pipeline::{Request, SpecRequest};
use crate::report::CAUTION;

use super::action::Action;
use super::characteristics::{self, TableState};
use super::database::{self, ActiveSource, DatabaseForm};
use super::lots::{self, ColumnPair, Lots};
use super::pairs::{self, PairsState};
use super::protocol_panel::{self, ProtocolState};
use super::screenshot::{ScreenshotOutcome, ScreenshotPlan};
use super::signing::{self, Note, SignForm};
use super::spec_editor::{SpecEditor, fits};
use super::state::{ResultState, Saved, View};
use super::words::file_part;
use super::worker::{DatabaseJob, Outcome, Purpose, Slot, Source, Worker};
use super::{direction, intervals, overview, side, specification, toolbar};

/// The application.
pub struct LotshiftApp {
    /// Persisted settings (the views' own choices are copied in when saving).
    pub saved: Saved,
    /// The lots and what is compared of them.
    pub lots: Lots,
    /// Background worker.
    pub worker: Worker,
    /// The result on screen and whether it is current.
    pub result: ResultState,
    /// Dismissible messages (file errors...).
    pub messages: Vec<String>,
    /// Short confirmations (export written...).
    pub notice: Option<String>,
    screenshot: Option<ScreenshotPlan>,
    /// The signing form, while open.
    pub signing: Option<SignForm>,
    /// The comparison protocol the window runs under, when one is loaded.
    pub protocol: Option<ProtocolState>,
    /// The audit trail every finished run is appended to (none: runs are not logged, as in
    /// the tests that do not ask for it).
    pub trail: Option<crate::report::trail::Trail>,
    /// The entries this session appended, in order.
    pub trail_log: Vec<crate::report::trail::TrailEntry>,
    /// What the comparison is about ([`crate::report::STANDARD_FIELDS`], in that order), as
    /// typed: copied into the record that is exported and signed.
    pub fields: [String; 6],
    /// Specification and margins of the latest run (built from `spec_editor`).
    pub spec: SpecRequest,
    /// The specification view's state: the specification as edited in the window.
    pub spec_editor: SpecEditor,
    /// The characteristics view's state.
    pub table: TableState,
    /// The pair view's state.
    pub pairs: PairsState,
    /// A specification file read before the lots it is for.
    pending_spec: Option<Spec>,
    /// The form that reads both lots from a database (its password is never stored).
    pub db_form: DatabaseForm,
    /// The database the lots on screen come from, when they do.
    pub database: Option<ActiveSource>,
    /// Two lots are being read in an order the user gave (the sample lots, the command
    /// line's reference then candidate): their roles are not guessed, so not asked about.
    order_given: bool,
}

impl LotshiftApp {
    /// A window with nothing loaded. `ctx` receives repaint requests from the worker.
    pub fn new(ctx: Option<egui::Context>, saved: Saved) -> Self {
        LotshiftApp {
            table: TableState {
                sort: saved.table_sort,
            },
            pairs: PairsState::from_saved(&saved),
            saved,
            lots: Lots::default(),
            worker: Worker::new(ctx),
            result: ResultState::default(),
            messages: Vec::new(),
            notice: None,
            screenshot: None,
            signing: None,
            protocol: None,
            trail: None,
            trail_log: Vec::new(),
            fields: Default::default(),
            spec: SpecRequest::default(),
            spec_editor: SpecEditor::default(),
            pending_spec: None,
            db_form: DatabaseForm::default(),
            database: None,
            order_given: false,
        }
    }

    /// What persists, with the views' own choices as they are now.
    pub fn saved_now(&self) -> Saved {
        let mut saved = self.saved.clone();
        self.pairs.save_to(&mut saved);
        saved.table_sort = self.table.sort;
        saved
    }

    /// Applies what a panel, a view, a shortcut or a test asks for.
    pub fn apply(&mut self, action: Action) {
        match action {
            Action::PickLots(slot) => self.worker.pick(slot),
            Action::LoadPaths(slot, paths) => self.load_paths(slot, paths),
            Action::LoadSamples => self.load_samples(),
            Action::OpenDatabaseForm => self.db_form.open = true,
            Action::CloseDatabaseForm => self.db_form.open = false,
            Action::UseRecentSource(k) => {
                if let Some(r) = self.saved.recent_sources.get(k) {
                    self.db_form.fill(r);
                }
            }
            Action::RunDatabase => self.run_database(),
            Action::SwapLots => self.swap(),
            Action::ConfirmRoles => self.lots.roles_to_confirm = false,
            Action::PairColumns {
                reference,
                candidate,
            } => {
                self.lots.pair(ColumnPair {
                    reference,
                    candidate,
                });
                self.rerun();
            }
            Action::UnpairColumns {
                reference,
                candidate,
            } => {
                self.lots.unpair(&ColumnPair {
                    reference,
                    candidate,
                });
                self.rerun();
            }
            Action::SplitBy { column, values } => {
                if self.lots.choose_split(column, values) {
                    self.resplit();
                }
            }
            Action::SetCompared { key, compared } => self.lots.set_compared(key, compared),
            Action::Settings(s) => self.saved.settings = *s,
            Action::SetCoverage(c) => self.saved.coverage = c,
            Action::Rerun => self.rerun(),
            Action::SetUnitAside {
                lot,
                row,
                labels,
                reason,
            } => {
                self.lots
                    .set_unit_aside(crate::data::exclusions::Exclusion {
                        lot,
                        row,
                        labels,
                        reason,
                    });
                self.rerun();
            }
            Action::RestoreUnit { lot, row } => {
                self.lots.restore_unit(lot, row);
                self.rerun();
            }
            Action::CancelRun => {
                self.worker.cancel();
                self.result
                    .cancel("cancelled; the result shown is from the previous run".into());
            }
            Action::ShowView(v) => self.saved.view = v,
            Action::SortTable(k) => self.table.sort_by(k),
            Action::SelectPair(p) => self.pairs.pair = Some(p),
            Action::ShowPairGrid(on) => self.pairs.grid = on,
            Action::DifferenceShadow(on) => self.pairs.difference_shadow = on,
            Action::PickSpec => self.worker.choose(Purpose::Specification),
            Action::PickProtocol => self.worker.choose(Purpose::Protocol),
            Action::LoadProtocol(path) => self.load_protocol(&path),
            Action::AcceptDeviations(reason) => {
                if let Some(ps) = &mut self.protocol {
                    ps.accept(&reason);
                    ps.reason.clear();
                }
                self.rerun();
            }
            Action::CloseProtocol => {
                self.protocol = None;
                self.notice = Some(
                    "Protocol closed: the settings stay as they are; runs are no longer checked \
                     against it."
                        .into(),
                );
                self.rerun();
            }
            Action::SaveSpec(to) => self.save_spec_to(to),
            Action::ApplySpec => self.apply_spec(),
            Action::Export => self.export(),
            Action::OpenSigning => self.open_signing(),
            Action::CloseSigning => self.signing = None,
            Action::PickSigningKey => self.worker.choose(Purpose::SigningKey),
            Action::PickKeyFolder => self.worker.choose(Purpose::KeyFolder),
            Action::Sign(to) => self.sign(to),
            Action::AddSignature(Some(path)) => self.add_signature(path),
            Action::AddSignature(None) => self.worker.choose(Purpose::SummaryToSign),
            Action::PickSummary => self.worker.choose(Purpose::Summary),
            Action::CheckSummary(path) => self.check_summary(&path),
            Action::Dismiss(k) => {
                if k < self.messages.len() {
                    self.messages.remove(k);
                }
            }
            Action::CloseNotice => self.notice = None,
        }
    }

    fn apply_all(&mut self, actions: Vec<Action>) {
        for a in actions {
            self.apply(a);
        }
    }

    /// The specification request of the next run, from the editor and the characteristics
    /// compared now.
    ///
    /// # Errors
    /// The problems of the cells that do not check.
    fn spec_request(&self) -> Result<SpecRequest, Vec<String>> {
        self.spec_editor
            .request(&self.lots.characteristic_list(true))
    }

    /// Reads a specification file in the background; when it reads and fits the lots'
    /// characteristics it replaces the table and a new run starts. A file that does not
    /// leaves the lots, the table and the result as they are, with the loader's message.
    pub fn load_spec_path(&mut self, path: PathBuf) {
        self.worker.load_spec(path);
    }

    /// Saves the specification as CSV to `path` (or where a save dialog says), through the
    /// atomic writer; the record then names the saved file and its SHA-256.
    pub fn save_spec_to(&mut self, path: Option<PathBuf>) {
        let compared = self.lots.characteristic_list(true);
        match self.spec_editor.rows_to_save(&compared) {
            Ok(rows) => {
                let name = self.spec_editor.save_name();
                self.worker.save_spec(name, rows, path);
            }
            Err(why) => self.messages.push(why),
        }
    }

    /// Applies the edited specification: a new run when it checks and differs from the one
    /// applied (or the previous run was held); held, with the problems shown, when not.
    pub fn apply_spec(&mut self) {
        match self.spec_request() {
            Ok(req) if req == self.spec && !self.result.is_held() => {}
            _ => self.rerun(),
        }
    }

    /// Takes a specification file that was read: checked against the characteristics both
    /// lots have (once lots are loaded; while they are still being read, it waits for them).
    fn accept_spec(&mut self, spec: Spec) {
        let matched = self.lots.characteristic_list(false);
        if matched.is_empty() && self.worker.busy() && !self.lots.loaded() {
            self.pending_spec = Some(spec);
            return;
        }
        if let Err(e) = fits(&spec, matched) {
            self.messages.push(format!(
                "{e} — the specification was not loaded; the table and the result are \
                 unchanged"
            ));
            return;
        }
        self.notice = Some(format!(
            "Specification loaded from {} ({} characteristics).",
            spec.path,
            spec.rows.len()
        ));
        self.spec_editor.load(spec);
        self.apply_spec();
    }

    /// Loads the bundled sample lots.
    pub fn load_samples(&mut self) {
        self.order_given = true;
        self.worker.load(Slot::Both, lots::samples());
    }

    /// Loads two files the user gave in order: the reference, then the candidate.
    pub fn load_in_order(&mut self, paths: Vec<PathBuf>) {
        self.load_paths(Slot::Both, paths);
        self.order_given = true;
    }

    /// Loads files into a slot.
    pub fn load_paths(&mut self, slot: Slot, paths: Vec<PathBuf>) {
        if paths.is_empty() {
            return;
        }
        self.order_given = false;
        for p in paths.iter().rev() {
            let s = p.display().to_string();
            self.saved.recent.retain(|r| r != &s);
            self.saved.recent.insert(0, s);
        }
        self.saved.recent.truncate(10);
        self.worker
            .load(slot, paths.into_iter().map(Source::Path).collect());
    }

    /// Runs the database form: reads both lots from the database in the background, or with
    /// the switch on compares inside it. A form that does not name a source says why in the
    /// form; nothing else changes until the work succeeds.
    pub fn run_database(&mut self) {
        let source = match self.db_form.source() {
            Ok(s) => s,
            Err(why) => {
                self.db_form.problem = Some(why);
                return;
            }
        };
        self.db_form.problem = None;
        let password = self.db_form.password();
        if self.db_form.in_database {
            self.worker.try_database(DatabaseJob {
                source,
                password,
                exclude: Vec::new(),
                settings: self.saved.settings.clone(),
                spec: SpecRequest::default(),
            });
        } else {
            self.worker.load_database(source, password);
        }
    }

    /// Lots read from a database: they replace the loaded lots (and are compared); a
    /// failure leaves everything as it is, with the one-line reason.
    fn database_loaded(
        &mut self,
        source: crate::source::QuerySource,
        result: Result<Vec<Lot>, String>,
    ) {
        match result {
            Err(e) => self.messages.push(e),
            Ok(lots) => {
                let active = ActiveSource {
                    source,
                    in_database: false,
                    password: None,
                    characteristics: Vec::new(),
                };
                database::remember(&mut self.saved.recent_sources, active.remembered());
                self.notice = Some(format!(
                    "Lots read from {} (lot column {}).",
                    active.source.database.url(),
                    active.source.lot_column
                ));
                self.db_form.open = false;
                self.lots.place(Slot::Both, lots);
                self.lots.roles_to_confirm = false;
                self.database = Some(active);
                self.protocol_ticks();
                self.rerun();
            }
        }
    }

    /// The first comparison inside a database: its result replaces the lots and the result
    /// on screen; a failure leaves everything as it is, with the one-line reason.
    fn database_compared(
        &mut self,
        source: crate::source::QuerySource,
        result: Result<Box<super::shown::Shown>, String>,
    ) {
        match result {
            Err(e) => self.messages.push(e),
            Ok(shown) => {
                let c = &shown.comparison;
                let active = ActiveSource {
                    source,
                    in_database: true,
                    password: self.db_form.password(),
                    characteristics: c
                        .characteristics
                        .iter()
                        .cloned()
                        .zip(c.units.iter().cloned())
                        .collect(),
                };
                database::remember(&mut self.saved.recent_sources, active.remembered());
                self.notice = Some(format!(
                    "Compared inside {} (lot column {}): only the lots' summaries were read.",
                    active.source.database.url(),
                    active.source.lot_column
                ));
                self.db_form.open = false;
                self.worker.supersede();
                self.lots = Lots::default();
                self.database = Some(active);
                self.result.start();
                self.result.arrive(Ok(shown));
                self.log_run();
                self.sync_fields();
            }
        }
    }

    /// A re-run of the comparison inside the database on screen (settings, ticks or the
    /// specification changed).
    fn rerun_in_database(&mut self, active: ActiveSource) {
        let spec = self.spec_request().unwrap_or_default();
        self.spec = spec.clone();
        let exclude = active
            .characteristics
            .iter()
            .filter(|(n, _)| self.lots.excluded.contains(&crate::data::match_key(n)))
            .map(|(n, _)| n.clone())
            .collect();
        self.result.start();
        self.worker.compare_in_database(DatabaseJob {
            source: active.source,
            password: active.password,
            exclude,
            settings: self.saved.settings.clone(),
            spec,
        });
    }

    /// Renders to `path` once the first result is drawn, then closes.
    pub fn plan_screenshot(&mut self, path: PathBuf) {
        self.screenshot = Some(ScreenshotPlan::new(path));
    }

    /// Outcome of the screenshot, once taken.
    pub fn screenshot_result(&self) -> Option<ScreenshotOutcome> {
        self.screenshot.as_ref().map(|s| s.done.clone())
    }

    /// Starts a new comparison of the current lots, selection and settings.
    /// A specification cell that does not check holds the run (the problems show as the
    /// run's error and beside the cells).
    pub fn rerun(&mut self) {
        if let Some(active) = self.database.as_ref().filter(|a| a.in_database) {
            self.rerun_in_database(active.clone());
            return;
        }
        let Some(lots) = self.lots.both() else {
            return;
        };
        let spec = match self.spec_request() {
            Ok(spec) => spec,
            Err(problems) => {
                self.worker.cancel();
                self.result.hold(format!(
                    "the specification does not check: {}{}. Fix it in the Specification tab.",
                    if problems.len() == 1 {
                        String::new()
                    } else {
                        format!("{} problems, the first: ", problems.len())
                    },
                    problems.first().map(String::as_str).unwrap_or_default()
                ));
                return;
            }
        };
        if let Some(ps) = &mut self.protocol {
            let compared: Vec<String> = self
                .lots
                .characteristic_list(true)
                .into_iter()
                .map(|(n, _)| n)
                .collect();
            let column = self.lots.combined.as_ref().map(|c| {
                (
                    c.column.as_str(),
                    [c.values[0].as_str(), c.values[1].as_str()],
                )
            });
            let found = crate::protocol::differences(
                &ps.protocol,
                &compared,
                &self.saved.settings,
                &spec,
                column,
            );
            match ps.settle(found) {
                Some(deviations) => ps.running = deviations,
                None => {
                    let list: Vec<String> = ps
                        .pending
                        .iter()
                        .map(|(what, want, got)| format!("{what}: {got} (protocol: {want})"))
                        .collect();
                    self.result.hold(format!(
                        "this comparison differs from the protocol ({}): give the reason above \
                         to record it as a deviation, or change it back",
                        list.join("; ")
                    ));
                    return;
                }
            }
        }
        self.result.start();
        self.spec = spec.clone();
        let request = Request {
            selection: self.lots.selection(),
            settings: self.saved.settings.clone(),
            spec,
            exclusions: self.lots.set_aside.clone(),
            ..Request::default()
        };
        self.worker.compare(lots, request);
    }

    fn resplit(&mut self) {
        match self.lots.resplit() {
            Ok(()) => self.rerun(),
            Err(e) => self.messages.push(e),
        }
    }

    /// Swaps reference and candidate.
    /// Swaps the lots. A margin is an allowed candidate − reference range, so an asymmetric
    /// margin is mirrored (below and above exchanged) to keep its meaning for the new roles.
    pub fn swap(&mut self) {
        self.lots.swap();
        let mut mirrored = Vec::new();
        for r in &mut self.spec_editor.rows {
            if r.asymmetric && (!r.below.trim().is_empty() || !r.above.trim().is_empty()) {
                std::mem::swap(&mut r.below, &mut r.above);
                mirrored.push(r.characteristic.clone());
            }
        }
        if !mirrored.is_empty() {
            self.notice = Some(format!(
                "Asymmetric margins mirrored for the new roles (candidate − reference): {}",
                mirrored.join(", ")
            ));
        }
        self.rerun();
    }

    /// Applies finished background work.
    pub fn absorb(&mut self, outcomes: Vec<Outcome>) {
        for o in outcomes {
            match o {
                Outcome::Loaded { slot, result } => self.loaded(slot, result),
                Outcome::DatabaseLoaded { source, result } => {
                    self.database_loaded(*source, result);
                }
                Outcome::DatabaseCompared { source, result } => {
                    self.database_compared(*source, result);
                }
                // A run held for a specification problem stays held: a result still
                // arriving is not current, and the problem stays the message. A failed run
                // keeps the previous result on screen, marked as not current.
                Outcome::Compared { result, last, .. } => {
                    let finished = last && result.is_ok();
                    self.result.arrive(result);
                    if finished {
                        self.log_run();
                    }
                    self.sync_fields();
                }
                Outcome::SpecLoaded(Err(e)) => self.messages.push(format!(
                    "{e} — the specification was not loaded; the table and the result are \
                     unchanged"
                )),
                Outcome::SpecLoaded(Ok(spec)) => self.accept_spec(spec),
                Outcome::SpecSaved(Err(e)) | Outcome::Exported(Err(e)) => self.messages.push(e),
                Outcome::SpecSaved(Ok(spec)) => {
                    self.notice = Some(format!("Specification written to {}", spec.path));
                    self.spec_editor.source = Some(spec);
                    self.apply_spec();
                }
                Outcome::Picked { slot, paths } => self.load_paths(slot, paths),
                Outcome::Chosen { purpose, path } => {
                    if let Some(p) = path {
                        self.chosen(purpose, p);
                    }
                }
                Outcome::Exported(Ok(p)) => {
                    self.notice = Some(format!("Record written to {}", p.display()));
                }
                Outcome::SummaryChecked(Ok(note)) => self.notice = Some(note),
                Outcome::SummaryChecked(Err(e)) => self.messages.push(e),
                other => match signing::absorb(&mut self.signing, &mut self.saved, other) {
                    Some(Note::Notice(n)) => self.notice = Some(n),
                    Some(Note::Message(m)) => self.messages.push(m),
                    None => {}
                },
            }
        }
    }

    /// Lots that were read (or why not): into their slots and compared; a specification read
    /// before them is then checked against them.
    fn loaded(&mut self, slot: Slot, result: Result<Vec<Lot>, String>) {
        if result.is_ok() {
            self.database = None;
        }
        match result {
            Err(e) => self.messages.push(e),
            Ok(mut lots) if slot == Slot::Combined => {
                if let Some(table) = lots.pop() {
                    match self.lots.set_combined(table) {
                        Ok(()) => {
                            self.protocol_split();
                            self.protocol_ticks();
                            self.rerun();
                        }
                        Err(e) => self.messages.push(e),
                    }
                }
            }
            Ok(lots) => {
                self.lots.place(slot, lots);
                if slot == Slot::Both && std::mem::take(&mut self.order_given) {
                    self.lots.roles_to_confirm = false;
                }
                self.protocol_ticks();
                self.rerun();
            }
        }
        if let Some(spec) = self.pending_spec.take() {
            self.accept_spec(spec);
        }
    }

    fn chosen(&mut self, purpose: Purpose, path: PathBuf) {
        match purpose {
            Purpose::SigningKey => self.worker.read_key(path),
            Purpose::KeyFolder => match signing::key_folder_signer(self.signing.as_mut()) {
                Ok((name, passphrase)) => self.worker.create_key(path, name, passphrase),
                Err(why) => self.form_problem(why),
            },
            Purpose::Summary => self.check_summary(&path),
            Purpose::SummaryToSign => self.add_signature(path),
            Purpose::Specification => self.load_spec_path(path),
            Purpose::Protocol => self.load_protocol(&path),
        }
    }

    fn form_problem(&mut self, why: String) {
        match &mut self.signing {
            Some(f) => f.problem = Some(why),
            None => self.messages.push(why),
        }
    }

    /// Checks a signed summary's signature (in the background) and, when the loaded lots are
    /// the files it names, that their SHA-256 match; the outcome goes to the message bar.
    pub fn check_summary(&mut self, path: &Path) {
        let loaded = self
            .lots
            .slots
            .iter()
            .flatten()
            .map(|l| l.provenance.sha256.clone())
            .collect();
        let current = self.result.current().map(|s| s.record.clone());
        self.worker
            .check_summary(path.to_path_buf(), loaded, current);
    }

    /// Signs the result shown with the remembered key (in the background) and saves the
    /// signed summary to `to`, or where a save dialog says.
    fn sign(&mut self, to: Option<PathBuf>) {
        let (Some(form), Some(shown)) = (&mut self.signing, self.result.shown()) else {
            return;
        };
        match signing::sign_job(form, &self.saved, shown, to) {
            Ok(job) => self.worker.sign(job),
            Err(why) => self.form_problem(why),
        }
    }

    /// Adds a signature with the form's name, meaning, comment and key to the signed summary
    /// at `path` (in the background; the file is rewritten atomically, or left as it was).
    fn add_signature(&mut self, path: PathBuf) {
        let Some(form) = &mut self.signing else {
            return;
        };
        match signing::add_job(form, &self.saved, path) {
            Ok(job) => self.worker.add_signature(job),
            Err(why) => self.form_problem(why),
        }
    }

    /// Opens the signing form (without a result shown it can only add a signature to a file:
    /// a signed summary or a comparison protocol); the remembered key (and the name stored
    /// beside it) is looked at in the background.
    pub fn open_signing(&mut self) {
        let key = self.saved.signing_key.clone();
        self.signing = Some(SignForm::new(self.saved.signer_name.clone(), key.clone()));
        if let Some(k) = key {
            self.worker.look_up_key(k);
        }
    }

    /// Opens the save dialog for the record.
    pub fn export(&mut self) {
        if let Some(s) = self.result.shown() {
            let c = &s.comparison;
            let name = format!(
                "comparison-{}-vs-{}.json",
                file_part(&c.lots[0].name),
                file_part(&c.lots[1].name)
            );
            self.worker.export(name, s.record.to_json(), None);
        }
    }

    /// The whole window inside `ui` (used by eframe and by the tests). Actions are applied
    /// as each part asks for them, so the parts drawn after see their effect in the same
    /// frame.
    pub fn show(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        let outcomes = self.worker.poll();
        self.absorb(outcomes);
        let shortcuts = toolbar::shortcuts(&ctx, self.lots.next_slot());
        self.apply_all(shortcuts);
        egui::Panel::top("top").show(ui, |ui| {
            let top = toolbar::Top {
                lots_loaded: self.lots.loaded(),
                result_shown: self.result.shown().is_some(),
                recent: &self.saved.recent,
                next_slot: self.lots.next_slot(),
                progress: self.worker.progress(),
                busy: self.worker.busy(),
            };
            let mut actions = Vec::new();
            toolbar::top_ui(ui, &top, &mut actions);
            self.apply_all(actions);
        });
        // The disposition caution, one quiet line under every view.
        egui::Panel::bottom("caution").show(ui, |ui| {
            ui.label(RichText::new(CAUTION).italics().small().weak());
        });
        egui::Panel::left("lots")
            .resizable(true)
            .default_size(320.0)
            .show(ui, |ui| {
                egui::ScrollArea::vertical().show(ui, |ui| self.side_ui(ui));
            });
        egui::CentralPanel::default().show(ui, |ui| self.central_ui(ui));
        if self.db_form.open {
            let mut actions = Vec::new();
            database::form_ui(
                &ctx,
                &mut self.db_form,
                &self.saved.recent_sources,
                self.worker.busy(),
                &mut actions,
            );
            self.apply_all(actions);
        }
        if let Some(form) = &mut self.signing {
            let mut actions = Vec::new();
            signing::form_ui(&ctx, form, self.result.shown().is_some(), &mut actions);
            self.apply_all(actions);
        }
        if self.worker.busy() {
            ctx.request_repaint_after(std::time::Duration::from_millis(50));
        }
        let ready = (self.result.shown().is_some()
            || !self.messages.is_empty()
            || self.result.error().is_some())
            && !self.worker.busy();
        if let Some(plan) = &mut self.screenshot {
            plan.step(&ctx, ready);
        }
    }

    fn side_ui(&mut self, ui: &mut egui::Ui) {
        let mut actions = Vec::new();
        database::open_button_ui(ui, &mut actions);
        self.apply_all(std::mem::take(&mut actions));
        ui.add_space(4.0);
        if let Some(active) = self.database.as_ref().filter(|a| a.in_database) {
            let counted = self.result.shown().and_then(|s| s.counted.as_ref());
            database::side_ui(ui, active, counted, &self.lots.excluded, &mut actions);
            self.apply_all(std::mem::take(&mut actions));
            ui.separator();
            side::settings_ui(ui, &self.saved.settings, self.saved.coverage, &mut actions);
            self.apply_all(actions);
            ui.separator();
            if side::fields_ui(ui, &mut self.fields) {
                self.sync_fields();
            }
            return;
        }
        if self.lots.roles_to_confirm {
            side::roles_ui(ui, &self.lots, &mut actions);
            self.apply_all(std::mem::take(&mut actions));
        }
        for i in 0..2 {
            if i == 1 {
                ui.add_space(6.0);
            }
            side::lot_slot_ui(ui, i, &self.lots, self.result.current(), &mut actions);
            self.apply_all(std::mem::take(&mut actions));
        }
        if let Some(c) = &self.lots.combined {
            side::combined_ui(ui, c, &mut actions);
            self.apply_all(std::mem::take(&mut actions));
        }
        side::one_lot_columns_ui(ui, &self.lots, &mut actions);
        self.apply_all(std::mem::take(&mut actions));
        ui.separator();
        side::characteristics_ui(ui, &self.lots, &mut actions);
        self.apply_all(std::mem::take(&mut actions));
        ui.separator();
        side::settings_ui(ui, &self.saved.settings, self.saved.coverage, &mut actions);
        self.apply_all(actions);
        ui.separator();
        if side::fields_ui(ui, &mut self.fields) {
            self.sync_fields();
        }
    }

    /// Appends the result on screen to the audit trail (a trail that cannot be written or
    /// whose chain is broken is reported, and the run is not in it).
    fn log_run(&mut self) {
        let (Some(trail), Some(s)) = (&mut self.trail, self.result.shown()) else {
            return;
        };
        let c = &s.comparison;
        let h = &c.hotelling;
        let headline = format!(
            "{} (alpha {}): T² = {}, {}",
            if h.differ {
                "the lots differ"
            } else {
                "no difference detected"
            },
            c.alpha(),
            crate::format::format_sig(h.t2, 6),
            crate::format::p_text(h.p_value)
        );
        let lots = [0, 1].map(|g| s.lots[g].provenance.sha256.clone());
        match trail.append(
            crate::report::sign::now_rfc3339(),
            lots,
            c.characteristics.clone(),
            serde_json::to_value(&s.record.settings).unwrap_or_default(),
            headline,
        ) {
            Ok(e) => self.trail_log.push(e),
            Err(e) => self
                .messages
                .push(format!("audit trail: {e} — this run is not in the trail")),
        }
    }

    /// Puts the typed description into the record on screen (the one exported and signed).
    pub fn sync_fields(&mut self) {
        let fields: Vec<crate::report::FieldRecord> = crate::report::STANDARD_FIELDS
            .iter()
            .zip(&self.fields)
            .filter(|(_, v)| !v.trim().is_empty())
            .map(|(n, v)| crate::report::FieldRecord {
                name: (*n).to_string(),
                value: v.trim().to_string(),
            })
            .collect();
        let protocol = self
            .protocol
            .as_ref()
            .map(|ps| crate::protocol::record_section(&ps.protocol, ps.running.clone()));
        let trail_file = self.trail.as_ref().map(|t| t.path.display().to_string());
        let log = &self.trail_log;
        if let Some(s) = self.result.shown_mut() {
            s.record.fields = fields;
            s.record.protocol = protocol;
            // The runs on these lot files this session, up to the one on screen.
            let lots = [0, 1].map(|g| s.lots[g].provenance.sha256.clone());
            s.record.audit_trail = match (trail_file, log.last()) {
                (Some(file), Some(last)) if last.lots == lots => Some(crate::report::AuditRecord {
                    file,
                    final_hash: last.hash.clone(),
                    runs: log
                        .iter()
                        .filter(|e| e.lots == lots)
                        .map(|e| crate::report::AuditRun {
                            seq: e.seq,
                            at: e.at.clone(),
                            characteristics: e.characteristics.clone(),
                            settings: e.settings.clone(),
                            headline: e.headline.clone(),
                            hash: e.hash.clone(),
                        })
                        .collect(),
                }),
                _ => None,
            };
        }
    }

    /// Runs under the protocol in `path`: its settings, description and specification, then
    /// its lots (their characteristics ticked as it fixes them once they are read). A
    /// protocol that cannot be used changes nothing.
    pub fn load_protocol(&mut self, path: &Path) {
        self.protocol_from(path, true);
    }

    /// As [`Self::load_protocol`], with the lots given on the command line instead of the
    /// protocol's (as `compare --protocol P FILES` does).
    pub fn load_protocol_keeping_lots(&mut self, path: &Path) {
        self.protocol_from(path, false);
    }

    fn protocol_from(&mut self, path: &Path, its_lots: bool) {
        let p = match crate::protocol::load(path) {
            Ok(p) => p,
            Err(e) => {
                self.messages.push(format!(
                    "{e} — the protocol was not loaded; nothing changed"
                ));
                return;
            }
        };
        self.saved.settings = p.settings.clone();
        for (value, name) in self.fields.iter_mut().zip(crate::report::STANDARD_FIELDS) {
            *value = p
                .file
                .fields
                .iter()
                .find(|f| f.name.eq_ignore_ascii_case(name))
                .map(|f| f.value.clone())
                .unwrap_or_default();
        }
        use super::spec_editor::RuleChoice;
        let e = &mut self.spec_editor;
        e.clear();
        match p.spec.rule {
            crate::analysis::decision::MarginRule::FileOnly => e.rule = RuleChoice::FileOnly,
            crate::analysis::decision::MarginRule::ToleranceFraction(f) => {
                e.rule = RuleChoice::ToleranceFraction;
                e.fraction = f.to_string();
            }
            crate::analysis::decision::MarginRule::ReferenceSd(k) => {
                e.rule = RuleChoice::ReferenceSd;
                e.sd = k.to_string();
            }
        }
        e.distance = p
            .spec
            .distance_margin
            .map(|d| d.to_string())
            .unwrap_or_default();
        self.pending_spec = p.spec.file.clone();
        let files = p.lot_files.clone();
        let combined = p.file.lots.lot_column.is_some();
        self.notice = Some(format!(
            "Running under the protocol {} (SHA-256 {}…): its lots, characteristics, settings \
             and specification. A change is recorded as a deviation with its reason.",
            path.display(),
            &p.sha256[..12]
        ));
        self.protocol = Some(ProtocolState::new(p));
        if !its_lots {
            return;
        }
        if combined {
            self.order_given = true;
            self.load_paths(Slot::Combined, files);
        } else {
            self.load_in_order(files);
        }
    }

    /// A file holding both lots, read for a protocol: split by the protocol's lot column and
    /// values.
    fn protocol_split(&mut self) {
        let Some(ps) = &self.protocol else { return };
        let l = &ps.protocol.file.lots;
        if let (Some(column), Some(values)) = (&l.lot_column, &l.values)
            && ps.ticks_pending
            && self.lots.choose_split(column.clone(), values.clone())
            && let Err(e) = self.lots.resplit()
        {
            self.messages.push(e);
        }
    }

    /// Once the protocol's lots are in: tick exactly the characteristics it compares.
    fn protocol_ticks(&mut self) {
        let Some(ps) = &mut self.protocol else { return };
        if !ps.ticks_pending {
            return;
        }
        let all = self.lots.characteristic_list(false);
        if all.is_empty() {
            return;
        }
        let want: Vec<String> = ps
            .protocol
            .file
            .characteristics
            .iter()
            .map(|c| crate::data::match_key(c))
            .collect();
        for (name, _) in all {
            let key = crate::data::match_key(&name);
            let on = want.contains(&key);
            self.lots.set_compared(key, on);
        }
        ps.ticks_pending = false;
    }

    fn central_ui(&mut self, ui: &mut egui::Ui) {
        let mut actions = Vec::new();
        toolbar::messages_ui(ui, &self.messages, self.notice.as_deref(), &mut actions);
        self.apply_all(std::mem::take(&mut actions));
        if let Some(ps) = &mut self.protocol {
            protocol_panel::protocol_ui(ui, ps, &mut actions);
            self.apply_all(std::mem::take(&mut actions));
        }
        let busy = self.worker.busy();
        toolbar::tabs_ui(ui, self.saved.view, &self.result, busy, &mut actions);
        self.apply_all(std::mem::take(&mut actions));
        if self.saved.view == View::Specification {
            self.specification_view(ui);
            return;
        }
        let Some(shown) = self.result.shown_mut() else {
            ui.label(if busy {
                "Working…"
            } else if self.lots.loaded() {
                "No result to show yet."
            } else {
                "Drop two lot files on this window, or use Open lots…"
            });
            // A reviewer or approver signs a file on disk without running a comparison (the
            // top bar has no room for one more button while a run shows its progress).
            if !busy {
                ui.add_space(8.0);
                if ui
                    .button("Add my signature…")
                    .on_hover_text("Add your signature (authorship, review, approval) to a signed summary or a comparison protocol on disk; no comparison needs to be run")
                    .clicked()
                {
                    actions.push(Action::OpenSigning);
                }
                self.apply_all(actions);
            }
            return;
        };
        match self.saved.view {
            View::Verdict => overview::overview_ui(ui, shown, &mut actions),
            View::Characteristics => {
                characteristics::table_ui(ui, shown, &self.table, &mut actions);
            }
            View::Intervals => intervals::intervals_ui(ui, shown),
            View::Pairs => {
                pairs::pairs_ui(ui, shown, &self.pairs, self.saved.coverage, &mut actions);
            }
            View::Direction => direction::direction_ui(ui, shown),
            View::Specification => {}
        }
        self.apply_all(actions);
    }

    fn specification_view(&mut self, ui: &mut egui::Ui) {
        let matched = self.lots.characteristic_list(false);
        let compared = self.lots.characteristic_list(true);
        let cx = specification::Context {
            matched: &matched,
            compared: &compared,
            applied: &self.spec,
            rule_margins: specification::rule_margins(self.result.shown()),
            lots_loaded: self.lots.loaded(),
        };
        let mut actions = Vec::new();
        specification::specification_ui(ui, &mut self.spec_editor, &cx, &mut actions);
        self.apply_all(actions);
    }
}

impl eframe::App for LotshiftApp {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        self.show(ui);
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        if self.screenshot.is_none() {
            eframe::set_value(storage, eframe::APP_KEY, &self.saved_now());
        }
    }
}
