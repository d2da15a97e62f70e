//! The window's state and layout: lot slots, characteristic list, settings, the view tabs,
//! background work and messages.

use std::collections::BTreeSet;
use std::path::PathBuf;
use std::sync::{Arc, Mutex};

use egui::{Color32, Key, KeyboardShortcut, Modifiers, RichText};
use serde::{Deserialize, Serialize};

use crate::analysis::Settings;
use crate::data::{self, Lot, Selection, match_key};

use super::shown::Shown;
use super::specification::{self, SpecEditor};
use super::worker::{Outcome, Purpose, Slot, Source, Worker};
use super::{characteristics, direction, intervals, overview, pairs};
use crate::report::CAUTION;
use crate::report::sign::{self, Meaning};

/// The bundled sample lots (invented; see sample-lots/README.md).
pub const SAMPLE_REFERENCE: (&str, &[u8]) = (
    "sample-lots/reference-route-a.csv",
    include_bytes!("../../sample-lots/reference-route-a.csv"),
);
/// The bundled candidate lot.
pub const SAMPLE_CANDIDATE: (&str, &[u8]) = (
    "sample-lots/candidate-route-b.csv",
    include_bytes!("../../sample-lots/candidate-route-b.csv"),
);

/// Colours of the reference and candidate lots in every plot, for the window's theme
/// (defined in [`crate::palette`]: the lighter shades on a dark background).
pub fn lot_colors(ui: &egui::Ui) -> [Color32; 2] {
    let dark = ui.visuals().dark_mode;
    crate::palette::LOTS.map(|s| {
        let c = if dark { s.rgb_on_dark } else { s.rgb };
        Color32::from_rgb(c[0], c[1], c[2])
    })
}

/// Shortcut: open lot files.
pub const OPEN: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::O);
/// Shortcut: swap reference and candidate.
pub const SWAP: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::R);
/// Shortcut: export the record.
pub const EXPORT: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::E);

/// The views, one per tab.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum View {
    /// Verdict, test table, checks, caution.
    #[default]
    #[serde(alias = "Overview")]
    Verdict,
    /// Per-characteristic table.
    Characteristics,
    /// Interval chart.
    Intervals,
    /// Pairwise ellipses.
    Pairs,
    /// Discriminant direction.
    Direction,
    /// Specification limits and equivalence margins (an editor, not a result).
    Specification,
}

impl View {
    /// All views in tab order.
    pub const ALL: [View; 6] = [
        View::Verdict,
        View::Characteristics,
        View::Intervals,
        View::Pairs,
        View::Direction,
        View::Specification,
    ];

    /// Tab title.
    pub fn title(self) -> &'static str {
        match self {
            View::Verdict => "Verdict",
            View::Characteristics => "Characteristics",
            View::Intervals => "Intervals",
            View::Pairs => "Pairs",
            View::Direction => "Shift direction",
            View::Specification => "Specification",
        }
    }

    /// The view's command-line name (`--view NAME`): the tab title's last word, lower case.
    pub fn name(self) -> &'static str {
        match self {
            View::Verdict => "verdict",
            View::Characteristics => "characteristics",
            View::Intervals => "intervals",
            View::Pairs => "pairs",
            View::Direction => "direction",
            View::Specification => "specification",
        }
    }

    /// Parses a command-line view name.
    pub fn from_name(name: &str) -> Option<View> {
        let name = name.to_ascii_lowercase();
        View::ALL.into_iter().find(|v| v.name() == name)
    }
}

/// What persists between runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Saved {
    /// Analysis settings.
    pub settings: Settings,
    /// Coverage of the data ellipses.
    pub coverage: f64,
    /// Open view.
    pub view: View,
    /// Recently opened files, newest first.
    pub recent: Vec<String>,
    /// Pair shown in the ellipse view (characteristic names).
    pub pair: Option<[String; 2]>,
    /// Show the grid of all pairs.
    pub pair_grid: bool,
    /// Draw the mean-difference ellipse as the shadow of the full T² region (else pair alone).
    pub difference_shadow: bool,
    /// Sort of the characteristics table: column and whether ascending.
    pub table_sort: Option<(usize, bool)>,
    /// Where the user's private signing key is (its location only, never its content).
    pub signing_key: Option<String>,
    /// Printed name used for the last signature.
    pub signer_name: String,
}

impl Default for Saved {
    fn default() -> Self {
        Saved {
            settings: Settings::default(),
            coverage: 0.95,
            view: View::Verdict,
            recent: Vec::new(),
            pair: None,
            pair_grid: true,
            difference_shadow: true,
            table_sort: None,
            signing_key: None,
            signer_name: String::new(),
        }
    }
}

/// One file holding both lots, split by a lot column.
pub struct Combined {
    table: Arc<Lot>,
    /// Text columns that can hold lots, with their distinct values.
    candidates: Vec<(String, Vec<String>)>,
    column: String,
    values: [String; 2],
}

/// Outcome of a screenshot, filled in by the screenshot callback.
pub type ScreenshotOutcome = Arc<Mutex<Option<Result<(), String>>>>;

/// Request to render the window to a PNG and close.
pub struct ScreenshotPlan {
    path: PathBuf,
    frames_ready: u32,
    requested: bool,
    started: std::time::Instant,
    /// Outcome, set by the screenshot callback.
    pub done: ScreenshotOutcome,
}

/// The application.
pub struct LotshiftApp {
    /// Persisted settings.
    pub saved: Saved,
    /// Reference and candidate lots as loaded.
    pub slots: [Option<Arc<Lot>>; 2],
    combined: Option<Combined>,
    /// Match keys of characteristics the user unticked.
    pub excluded: BTreeSet<String>,
    /// Background worker.
    pub worker: Worker,
    /// The latest result.
    pub shown: Option<Box<Shown>>,
    /// The shown result matches the current lots, selection and settings.
    pub shown_current: bool,
    /// Why the latest run gave no result.
    pub run_error: Option<String>,
    /// Dismissible messages (file errors...).
    pub messages: Vec<String>,
    /// Short confirmations (export written...).
    pub notice: Option<String>,
    screenshot: Option<ScreenshotPlan>,
    /// The signing form, while open.
    pub signing: Option<SignForm>,
    /// Specification and margins of the latest run (built from `spec_editor`).
    pub spec: crate::pipeline::SpecRequest,
    /// The specification as edited in the window.
    pub spec_editor: SpecEditor,
    /// The latest run was held because a specification cell does not check.
    pub spec_blocked: bool,
    /// A specification file read before the lots it is for.
    pending_spec: Option<crate::data::spec::Spec>,
}

/// The "Sign and export" form.
#[derive(Debug, Clone)]
pub struct SignForm {
    /// Printed name of the signer.
    pub signer: String,
    /// Meaning of the signature.
    pub meaning: Meaning,
    /// Last problem, shown in the form.
    pub problem: Option<String>,
}

impl LotshiftApp {
    /// A window with nothing loaded. `ctx` receives repaint requests from the worker.
    pub fn new(ctx: Option<egui::Context>, saved: Saved) -> Self {
        LotshiftApp {
            saved,
            slots: [None, None],
            combined: None,
            excluded: BTreeSet::new(),
            worker: Worker::new(ctx),
            shown: None,
            shown_current: false,
            run_error: None,
            messages: Vec::new(),
            notice: None,
            screenshot: None,
            signing: None,
            spec: crate::pipeline::SpecRequest::default(),
            spec_editor: SpecEditor::default(),
            spec_blocked: false,
            pending_spec: None,
        }
    }

    /// The specification request of the next run, from the editor and the characteristics
    /// compared now.
    ///
    /// # Errors
    /// The problems of the cells that do not check.
    fn spec_request(&self) -> Result<crate::pipeline::SpecRequest, Vec<String>> {
        self.spec_editor.request(&self.characteristic_list(true))
    }

    /// The characteristics both lots have (numeric in both, with some values), in the
    /// reference lot's order, with their units; without the unticked ones when `ticked`.
    pub fn characteristic_list(&self, ticked: bool) -> Vec<specification::Characteristic> {
        let [Some(a), Some(b)] = &self.slots else {
            return Vec::new();
        };
        a.columns
            .iter()
            .filter(|c| c.is_numeric() && c.missing < a.len())
            .filter_map(|c| {
                let key = match_key(&c.name);
                let cb = b
                    .columns
                    .iter()
                    .find(|x| x.is_numeric() && match_key(&x.name) == key)?;
                if cb.missing == b.len() || ticked && self.excluded.contains(&key) {
                    return None;
                }
                Some((c.name.clone(), c.unit.clone().or_else(|| cb.unit.clone())))
            })
            .collect()
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
        let compared = self.characteristic_list(true);
        let rows = match self.spec_editor.rows_for(&compared) {
            Ok(r) if !r.is_empty() => r,
            Ok(_) => {
                self.messages
                    .push("The specification table is empty: there is nothing to save.".into());
                return;
            }
            Err(problems) => {
                self.messages.push(format!(
                    "The specification was not saved: fix {} first.",
                    problems.join("; ")
                ));
                return;
            }
        };
        let name = self
            .spec_editor
            .source
            .as_ref()
            .map(|s| s.file_name.clone())
            .filter(|n| n != specification::EDITED && n.to_ascii_lowercase().ends_with(".csv"))
            .unwrap_or_else(|| "specification.csv".into());
        self.worker.save_spec(name, rows, path);
    }

    /// Applies the edited specification: a new run when it checks and differs from the one
    /// applied (or the previous run was held); held, with the problems shown, when not.
    pub fn apply_spec(&mut self) {
        match self.spec_request() {
            Ok(req) if req == self.spec && !self.spec_blocked => {}
            _ => self.rerun(),
        }
    }

    /// Takes a specification file that was read: checked against the characteristics both
    /// lots have (once lots are loaded; while they are still being read, it waits for them).
    fn accept_spec(&mut self, spec: crate::data::spec::Spec) {
        let matched = self.characteristic_list(false);
        if matched.is_empty() && self.worker.busy() && self.slots.iter().any(Option::is_none) {
            self.pending_spec = Some(spec);
            return;
        }
        if !matched.is_empty() {
            let (names, units): (Vec<String>, Vec<Option<String>>) = matched.into_iter().unzip();
            if let Err(e) = spec.align(&names, &units) {
                self.messages.push(format!(
                    "{e} — the specification was not loaded; the table and the result are \
                     unchanged"
                ));
                return;
            }
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
        self.worker.load(
            Slot::Both,
            vec![
                Source::Embedded(SAMPLE_REFERENCE.0, SAMPLE_REFERENCE.1),
                Source::Embedded(SAMPLE_CANDIDATE.0, SAMPLE_CANDIDATE.1),
            ],
        );
    }

    /// Loads files into a slot.
    pub fn load_paths(&mut self, slot: Slot, paths: Vec<PathBuf>) {
        if paths.is_empty() {
            return;
        }
        for p in paths.iter().rev() {
            let s = p.display().to_string();
            self.saved.recent.retain(|r| r != &s);
            self.saved.recent.insert(0, s);
        }
        self.saved.recent.truncate(10);
        self.worker
            .load(slot, paths.into_iter().map(Source::Path).collect());
    }

    /// Renders to `path` once the first result is drawn, then closes.
    pub fn plan_screenshot(&mut self, path: PathBuf) {
        self.screenshot = Some(ScreenshotPlan {
            path,
            frames_ready: 0,
            requested: false,
            started: std::time::Instant::now(),
            done: Arc::new(Mutex::new(None)),
        });
    }

    /// Outcome of the screenshot, once taken.
    pub fn screenshot_result(&self) -> Option<ScreenshotOutcome> {
        self.screenshot.as_ref().map(|s| s.done.clone())
    }

    fn selection(&self) -> Selection {
        let Some(a) = &self.slots[0] else {
            return Selection::default();
        };
        let exclude = a
            .columns
            .iter()
            .filter(|c| c.is_numeric() && self.excluded.contains(&match_key(&c.name)))
            .map(|c| c.name.clone())
            .collect();
        Selection {
            only: None,
            exclude,
        }
    }

    /// Starts a new comparison of the current lots, selection and settings.
    /// A specification cell that does not check holds the run (the problems show as the
    /// run's error and beside the cells).
    pub fn rerun(&mut self) {
        if let [Some(a), Some(b)] = &self.slots {
            let lots = [a.clone(), b.clone()];
            let sel = self.selection();
            self.shown_current = false;
            let spec = match self.spec_request() {
                Ok(spec) => spec,
                Err(problems) => {
                    self.spec_blocked = true;
                    self.worker.cancel();
                    self.run_error = Some(format!(
                        "the specification does not check: {}{}. Fix it in the Specification \
                         tab.",
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
            self.spec_blocked = false;
            self.spec = spec.clone();
            let request = crate::pipeline::Request {
                selection: sel,
                settings: self.saved.settings.clone(),
                spec,
                strict_columns: false,
                exclusions: Vec::new(),
            };
            self.worker.compare(lots, request);
        }
    }

    fn resplit(&mut self) {
        let Some(c) = &self.combined else { return };
        match data::split_lot(&c.table, &c.column, Some([&c.values[0], &c.values[1]])) {
            Ok([a, b]) => {
                self.slots = [Some(Arc::new(a)), Some(Arc::new(b))];
                self.rerun();
            }
            Err(e) => self.messages.push(e.to_string()),
        }
    }

    /// Swaps reference and candidate.
    pub fn swap(&mut self) {
        if let Some(c) = &mut self.combined {
            c.values.swap(0, 1);
        }
        self.slots.swap(0, 1);
        self.rerun();
    }

    /// Applies finished background work.
    pub fn absorb(&mut self, outcomes: Vec<Outcome>) {
        for o in outcomes {
            match o {
                Outcome::Loaded { slot, result } => match result {
                    Err(e) => {
                        self.messages.push(e);
                        if let Some(spec) = self.pending_spec.take() {
                            self.accept_spec(spec);
                        }
                    }
                    Ok(mut lots) => {
                        match slot {
                            Slot::Reference | Slot::Candidate => {
                                let i = usize::from(slot == Slot::Candidate);
                                self.combined = None;
                                self.slots[i] = lots.pop().map(Arc::new);
                            }
                            Slot::Both => {
                                self.combined = None;
                                let b = lots.pop().map(Arc::new);
                                let a = lots.pop().map(Arc::new);
                                self.slots = [a, b];
                            }
                            Slot::Combined => {
                                if let Some(table) = lots.pop() {
                                    self.set_combined(table);
                                }
                                if let Some(spec) = self.pending_spec.take() {
                                    self.accept_spec(spec);
                                }
                                continue;
                            }
                        }
                        self.rerun();
                        if let Some(spec) = self.pending_spec.take() {
                            self.accept_spec(spec);
                        }
                    }
                },
                Outcome::Compared { result, .. } => match result {
                    // A run held for a specification problem stays held: a result still
                    // arriving is not current, and the problem stays the message.
                    Ok(s) => {
                        self.shown = Some(s);
                        self.shown_current = !self.spec_blocked;
                        if !self.spec_blocked {
                            self.run_error = None;
                        }
                    }
                    Err(e) => {
                        // Keep the previous result on screen, marked as not current.
                        if !self.spec_blocked {
                            self.run_error = Some(e);
                        }
                    }
                },
                Outcome::SpecLoaded(result) => match result {
                    Err(e) => self.messages.push(format!(
                        "{e} — the specification was not loaded; the table and the result are \
                         unchanged"
                    )),
                    Ok(spec) => self.accept_spec(spec),
                },
                Outcome::SpecSaved(result) => match result {
                    Err(e) => self.messages.push(e),
                    Ok(spec) => {
                        self.notice = Some(format!("Specification written to {}", spec.path));
                        self.spec_editor.source = Some(spec);
                        self.apply_spec();
                    }
                },
                Outcome::Picked { slot, paths } => self.load_paths(slot, paths),
                Outcome::Chosen { purpose, path } => {
                    if let Some(p) = path {
                        self.chosen(purpose, p);
                    }
                }
                Outcome::Exported(r) => match r {
                    Ok(p) => self.notice = Some(format!("Record written to {}", p.display())),
                    Err(e) => self.messages.push(e),
                },
            }
        }
    }

    fn chosen(&mut self, purpose: Purpose, path: PathBuf) {
        match purpose {
            Purpose::SigningKey => match sign::read_signing_key(&path) {
                Ok(_) => {
                    if let Some(name) = sign::signer_beside(&path)
                        && let Some(f) = &mut self.signing
                    {
                        f.signer = name;
                    }
                    self.saved.signing_key = Some(path.display().to_string());
                }
                Err(e) => self.form_problem(e.to_string()),
            },
            Purpose::KeyFolder => {
                let name = self
                    .signing
                    .as_ref()
                    .map(|f| f.signer.trim().to_string())
                    .unwrap_or_default();
                if name.is_empty() {
                    self.form_problem(
                        "Type your printed name first: it is stored with the key.".into(),
                    );
                    return;
                }
                match sign::keygen(&path, "lotshift-signing-key", &name) {
                    Ok(p) => {
                        self.notice = Some(format!(
                            "Signing key created: {} (private, keep it to yourself) and its public half beside it for reviewers",
                            p.display()
                        ));
                        self.saved.signing_key = Some(p.display().to_string());
                    }
                    Err(e) => self.form_problem(e.to_string()),
                }
            }
            Purpose::Summary => self.check_summary(&path),
            Purpose::Specification => self.load_spec_path(path),
        }
    }

    fn form_problem(&mut self, why: String) {
        match &mut self.signing {
            Some(f) => f.problem = Some(why),
            None => self.messages.push(why),
        }
    }

    /// Checks a signed summary's signature and, when the loaded lots are the files it names,
    /// that their SHA-256 match; the outcome goes to the message bar.
    pub fn check_summary(&mut self, path: &std::path::Path) {
        let text = match std::fs::read_to_string(path) {
            Ok(t) => t,
            Err(e) => {
                self.messages.push(format!("{}: {e}", path.display()));
                return;
            }
        };
        match sign::verify_signature(&text, None) {
            Err(e) => self
                .messages
                .push(format!("{}: NOT VERIFIED: {e}", path.display())),
            Ok(s) => {
                let sig = &s.signature;
                let mut note = format!(
                    "{}: signature valid — signed by {} on {} UTC, meaning {}, key {}.",
                    path.display(),
                    sig.signer,
                    sig.signed_at,
                    sig.meaning,
                    sig.key_fingerprint
                );
                let recorded: Vec<String> = s.record["lots"]
                    .as_array()
                    .into_iter()
                    .flatten()
                    .map(|l| l["sha256"].as_str().unwrap_or_default().to_string())
                    .collect();
                let loaded: Vec<String> = self
                    .slots
                    .iter()
                    .flatten()
                    .map(|l| l.provenance.sha256.clone())
                    .collect();
                if loaded.len() == 2 && recorded == loaded {
                    match self.shown.as_ref().filter(|_| self.shown_current) {
                        Some(shown) => {
                            let now = serde_json::to_value(&shown.record).unwrap_or_default();
                            match sign::first_difference(&s.record, &now) {
                                None => note.push_str(" The loaded lots are the files it names, and every number matches the current result."),
                                Some(d) => note.push_str(&format!(" The loaded lots are the files it names, but the current result differs (check the settings and characteristics): {d}")),
                            }
                        }
                        None => note
                            .push_str(" The loaded lots are the files it names (SHA-256 match)."),
                    }
                } else {
                    note.push_str(" The loaded lots are not the files it names; load them to compare the numbers, or use lotshift verify.");
                }
                self.notice = Some(note);
            }
        }
    }

    /// Signs the current record with the remembered key and asks where to save it.
    fn sign_and_export(&mut self) {
        let (Some(form), Some(shown)) = (&self.signing, &self.shown) else {
            return;
        };
        let Some(key_path) = self.saved.signing_key.clone() else {
            self.form_problem("Choose or create a signing key first.".into());
            return;
        };
        if form.signer.trim().is_empty() {
            self.form_problem("Type your printed name.".into());
            return;
        }
        let key = match sign::read_signing_key(std::path::Path::new(&key_path)) {
            Ok(k) => k,
            Err(e) => {
                self.form_problem(e.to_string());
                return;
            }
        };
        let mut record = shown.record.clone();
        record.analysed_at = Some(sign::now_rfc3339());
        match sign::sign(
            &record,
            &key,
            form.signer.trim(),
            form.meaning,
            &sign::now_rfc3339(),
        ) {
            Ok(summary) => {
                self.saved.signer_name = form.signer.trim().to_string();
                let name = format!(
                    "signed-comparison-{}-vs-{}.json",
                    sanitize(&shown.comparison.lots[0].name),
                    sanitize(&shown.comparison.lots[1].name)
                );
                self.worker.export(name, summary.to_json());
                self.signing = None;
            }
            Err(e) => self.form_problem(e.to_string()),
        }
    }

    fn signing_ui(&mut self, ctx: &egui::Context) {
        let Some(mut form) = self.signing.take() else {
            return;
        };
        let mut open = true;
        let mut action: Option<&str> = None;
        let key = self
            .saved
            .signing_key
            .clone()
            .filter(|k| std::path::Path::new(k).exists());
        egui::Window::new("Sign and export the comparison")
            .open(&mut open)
            .collapsible(false)
            .resizable(false)
            .show(ctx, |ui| {
                ui.label("A signed summary holds the whole comparison record and your signature: your printed name, the time of signing (UTC), the meaning of the signature, and an Ed25519 signature over it, so a reviewer can check it with lotshift verify.");
                ui.add_space(6.0);
                ui.horizontal(|ui| {
                    let label = ui.label("printed name");
                    ui.text_edit_singleline(&mut form.signer).labelled_by(label.id);
                });
                ui.horizontal(|ui| {
                    ui.label("meaning");
                    ui.radio_value(&mut form.meaning, Meaning::Review, "review");
                    ui.radio_value(&mut form.meaning, Meaning::Approval, "approval");
                    ui.radio_value(&mut form.meaning, Meaning::Authorship, "authorship");
                });
                match &key {
                    Some(k) => {
                        ui.label(format!("signing key: {k}"));
                        if ui.small_button("Use another key…").clicked() {
                            action = Some("choose");
                        }
                    }
                    None => {
                        ui.label("No signing key yet. Create one (stored in a folder you choose; lotshift remembers only where it is), or use an existing one.");
                        ui.horizontal(|ui| {
                            if ui.button("Create a key in a folder…").clicked() {
                                action = Some("create");
                            }
                            if ui.button("Use an existing key…").clicked() {
                                action = Some("choose");
                            }
                        });
                    }
                }
                if let Some(p) = &form.problem {
                    ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
                }
                ui.add_space(6.0);
                ui.horizontal(|ui| {
                    if ui.add_enabled(key.is_some(), egui::Button::new("Sign and save…")).clicked() {
                        action = Some("sign");
                    }
                    if ui.button("Cancel").clicked() {
                        action = Some("cancel");
                    }
                });
                ui.label(RichText::new(CAUTION).italics().small());
            });
        form.problem = if action.is_some() { None } else { form.problem };
        self.signing = Some(form);
        match action {
            Some("create") => self.worker.choose(Purpose::KeyFolder),
            Some("choose") => self.worker.choose(Purpose::SigningKey),
            Some("sign") => self.sign_and_export(),
            Some("cancel") => self.signing = None,
            _ => {}
        }
        if !open {
            self.signing = None;
        }
    }

    /// Opens the signing form.
    pub fn open_signing(&mut self) {
        if self.shown.is_none() {
            return;
        }
        let signer = self
            .saved
            .signing_key
            .as_deref()
            .and_then(|k| sign::signer_beside(std::path::Path::new(k)))
            .unwrap_or_else(|| self.saved.signer_name.clone());
        self.signing = Some(SignForm {
            signer,
            meaning: Meaning::Review,
            problem: None,
        });
    }

    fn set_combined(&mut self, table: Lot) {
        let candidates = data::lot_column_candidates(&table);
        let Some((column, values)) = candidates.first().cloned() else {
            self.messages.push(format!(
                "{}: no text column with between 2 and 50 distinct values to split the lots by; \
                 the file is left unloaded",
                table.provenance.path
            ));
            return;
        };
        self.combined = Some(Combined {
            table: Arc::new(table),
            candidates,
            column,
            values: [values[0].clone(), values[1].clone()],
        });
        self.resplit();
    }

    fn shortcuts(&mut self, ctx: &egui::Context) {
        let (open, swap, export) = ctx.input_mut(|i| {
            (
                i.consume_shortcut(&OPEN),
                i.consume_shortcut(&SWAP),
                i.consume_shortcut(&EXPORT),
            )
        });
        if open {
            self.worker.pick(Slot::Both);
        }
        if swap {
            self.swap();
        }
        if export {
            self.export();
        }
        let dropped: Vec<PathBuf> = ctx.input(|i| {
            i.raw
                .dropped_files
                .iter()
                .map(|f| f.path().to_path_buf())
                .collect()
        });
        match dropped.len() {
            0 => {}
            1 => {
                let slot = if self.slots[0].is_none() {
                    Slot::Reference
                } else {
                    Slot::Candidate
                };
                self.load_paths(slot, dropped);
            }
            _ => {
                let mut d = dropped;
                d.sort();
                d.truncate(2);
                self.load_paths(Slot::Both, d);
            }
        }
    }

    /// Opens the save dialog for the record.
    pub fn export(&mut self) {
        if let Some(s) = &self.shown {
            let name = format!(
                "comparison-{}-vs-{}.json",
                sanitize(&s.comparison.lots[0].name),
                sanitize(&s.comparison.lots[1].name)
            );
            self.worker.export(name, s.record.to_json());
        }
    }

    /// The whole window inside `ui` (used by eframe and by the tests).
    pub fn show(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        let outcomes = self.worker.poll();
        self.absorb(outcomes);
        self.shortcuts(&ctx);
        egui::Panel::top("top").show(ui, |ui| self.top_ui(ui));
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
        self.signing_ui(&ctx);
        if self.worker.busy() {
            ctx.request_repaint_after(std::time::Duration::from_millis(50));
        }
        self.screenshot_step(&ctx);
    }

    fn top_ui(&mut self, ui: &mut egui::Ui) {
        ui.horizontal_wrapped(|ui| {
            ui.heading("lotshift");
            ui.separator();
            if ui
                .button("Open lots…")
                .on_hover_text(format!(
                    "Pick two lot files, reference first ({})",
                    ui.ctx().format_shortcut(&OPEN)
                ))
                .clicked()
            {
                self.worker.pick(Slot::Both);
            }
            if ui
                .button("Open one file with a lot column…")
                .on_hover_text("Both lots in one file, told apart by a column such as lot or route")
                .clicked()
            {
                self.worker.pick(Slot::Combined);
            }
            if ui
                .add_enabled(
                    self.slots.iter().all(Option::is_some),
                    egui::Button::new("Swap lots"),
                )
                .on_hover_text(format!(
                    "Make the candidate the reference and vice versa ({})",
                    ui.ctx().format_shortcut(&SWAP)
                ))
                .clicked()
            {
                self.swap();
            }
            if ui
                .add_enabled(self.shown.is_some(), egui::Button::new("Sign and export…"))
                .on_hover_text("Sign the comparison with your key and save the signed summary")
                .clicked()
            {
                self.open_signing();
            }
            if ui
                .button("Check a signed summary…")
                .on_hover_text("Open a signed summary and check its signature (and, with its lots loaded, its numbers)")
                .clicked()
            {
                self.worker.choose(Purpose::Summary);
            }
            if ui
                .add_enabled(self.shown.is_some(), egui::Button::new("Export record…"))
                .on_hover_text(format!(
                    "Save the comparison record as JSON ({})",
                    ui.ctx().format_shortcut(&EXPORT)
                ))
                .clicked()
            {
                self.export();
            }
            if !self.saved.recent.is_empty() {
                ui.menu_button("Recent", |ui| {
                    let mut chosen = None;
                    for r in &self.saved.recent {
                        if ui.button(r).clicked() {
                            chosen = Some(PathBuf::from(r));
                        }
                    }
                    if let Some(p) = chosen {
                        let slot = if self.slots[0].is_none() {
                            Slot::Reference
                        } else {
                            Slot::Candidate
                        };
                        self.load_paths(slot, vec![p]);
                    }
                });
            }
            if ui
                .button("Sample lots")
                .on_hover_text("Load the bundled, invented sample lots")
                .clicked()
            {
                self.load_samples();
            }
            ui.separator();
            if let Some((stage, f)) = self.worker.progress() {
                ui.add(
                    egui::ProgressBar::new(f as f32)
                        .desired_width(160.0)
                        .text(format!("computing: {stage}")),
                );
                if ui.button("Cancel").clicked() {
                    self.worker.cancel();
                    self.run_error =
                        Some("cancelled; the result shown is from the previous run".into());
                }
            } else if self.worker.busy() {
                ui.spinner();
                ui.label("reading files…");
            }
        });
    }

    fn lot_slot_ui(&mut self, ui: &mut egui::Ui, i: usize) {
        let (title, color) = if i == 0 {
            ("Reference lot", 0)
        } else {
            ("Candidate lot", 1)
        };
        ui.horizontal(|ui| {
            swatch(
                ui,
                lot_colors(ui)[color],
                crate::palette::LOTS[color].filled,
            );
            ui.strong(title);
            if self.combined.is_none() && ui.small_button("Open…").clicked() {
                self.worker.pick(if i == 0 {
                    Slot::Reference
                } else {
                    Slot::Candidate
                });
            }
        });
        match &self.slots[i] {
            None => {
                ui.weak("no file: drop one here or use Open…");
            }
            Some(lot) => {
                let p = &lot.provenance;
                ui.label(format!("{} — \"{}\"", p.file_name, lot.name));
                // Always two lines, so the panel does not jump while a run is under way.
                ui.label(format!("{} rows read", lot.len()));
                let used = self
                    .shown
                    .as_ref()
                    .filter(|_| self.shown_current)
                    .map(|s| &s.prepared.lots[i]);
                match used {
                    Some(pl) if pl.n_excluded > 0 => {
                        let why: Vec<String> = s_missing(self.shown.as_deref(), i);
                        ui.label(format!(
                            "{} units used; {} left out for missing cells ({})",
                            pl.data.nrows(),
                            pl.n_excluded,
                            why.join(", ")
                        ))
                        .on_hover_text("A unit with a missing cell in any compared characteristic is left out of the whole analysis (listwise).");
                    }
                    Some(pl) => {
                        ui.label(format!("{} units used", pl.data.nrows()));
                    }
                    None => {
                        ui.weak("units used: when the comparison is done");
                    }
                }
                for n in &p.notes {
                    ui.weak(n);
                }
            }
        }
    }

    fn side_ui(&mut self, ui: &mut egui::Ui) {
        self.lot_slot_ui(ui, 0);
        ui.add_space(6.0);
        self.lot_slot_ui(ui, 1);
        let mut resplit = false;
        if let Some(c) = &mut self.combined {
            ui.add_space(6.0);
            ui.strong(format!("Lots in {}", c.table.provenance.file_name));
            let before = (c.column.clone(), c.values.clone());
            egui::ComboBox::from_label("lot column")
                .selected_text(c.column.clone())
                .show_ui(ui, |ui| {
                    for (name, _) in &c.candidates {
                        ui.selectable_value(&mut c.column, name.clone(), name);
                    }
                });
            let values = c
                .candidates
                .iter()
                .find(|(n, _)| n == &c.column)
                .map(|(_, v)| v.clone())
                .unwrap_or_default();
            if before.0 != c.column && values.len() >= 2 {
                c.values = [values[0].clone(), values[1].clone()];
            }
            for (k, label) in ["reference lot value", "candidate lot value"]
                .iter()
                .enumerate()
            {
                egui::ComboBox::from_label(*label)
                    .selected_text(c.values[k].clone())
                    .show_ui(ui, |ui| {
                        for v in &values {
                            ui.selectable_value(&mut c.values[k], v.clone(), v);
                        }
                    });
            }
            if (c.column.clone(), c.values.clone()) != before && c.values[0] != c.values[1] {
                resplit = true;
            }
        }
        if resplit {
            self.resplit();
        }
        ui.separator();
        self.characteristics_ui(ui);
        ui.separator();
        self.settings_ui(ui);
    }

    fn characteristics_ui(&mut self, ui: &mut egui::Ui) {
        ui.strong("Characteristics to compare");
        let [Some(a), Some(b)] = &self.slots else {
            ui.weak("load two lots to choose");
            return;
        };
        let (a, b) = (a.clone(), b.clone());
        let mut changed = false;
        for c in a.columns.iter().filter(|c| c.is_numeric()) {
            let key = match_key(&c.name);
            let in_b = b
                .columns
                .iter()
                .any(|x| x.is_numeric() && match_key(&x.name) == key);
            if !in_b {
                continue;
            }
            let mut on = !self.excluded.contains(&key);
            let label = match &c.unit {
                Some(u) => format!("{} ({u})", c.name),
                None => c.name.clone(),
            };
            if ui.checkbox(&mut on, label).changed() {
                if on {
                    self.excluded.remove(&key);
                } else {
                    self.excluded.insert(key);
                }
                changed = true;
            }
        }
        let labels: Vec<&str> = a
            .columns
            .iter()
            .filter(|c| !c.is_numeric())
            .map(|c| c.header.as_str())
            .collect();
        if !labels.is_empty() {
            ui.weak(format!("labels: {}", labels.join(", ")));
        }
        for (g, lot) in [(&a, &b), (&b, &a)].iter().enumerate() {
            for c in lot.0.columns.iter().filter(|c| c.is_numeric()) {
                let key = match_key(&c.name);
                if !lot
                    .1
                    .columns
                    .iter()
                    .any(|x| x.is_numeric() && match_key(&x.name) == key)
                {
                    ui.label(
                        RichText::new(format!(
                            "not compared: \"{}\" is only in the {} lot",
                            c.header,
                            if g == 0 { "reference" } else { "candidate" }
                        ))
                        .italics(),
                    );
                }
            }
        }
        if changed {
            self.rerun();
        }
    }

    fn settings_ui(&mut self, ui: &mut egui::Ui) {
        ui.strong("Settings");
        let mut changed = false;
        ui.horizontal(|ui| {
            let label = ui.label("alpha");
            changed |= ui
                .add(
                    egui::DragValue::new(&mut self.saved.settings.alpha)
                        .range(0.0001..=0.5)
                        .speed(0.001)
                        .max_decimals(4),
                )
                .labelled_by(label.id)
                .on_hover_text(
                    "Significance level of the test; intervals are at 1 - alpha confidence",
                )
                .changed();
        });
        changed |= ui
            .checkbox(
                &mut self.saved.settings.leave_one_out,
                "leave-one-out misclassification",
            )
            .changed();
        ui.horizontal(|ui| {
            let label = ui.label("data ellipse coverage");
            ui.add(
                egui::DragValue::new(&mut self.saved.coverage)
                    .range(0.5..=0.999)
                    .speed(0.005)
                    .max_decimals(3),
            )
            .labelled_by(label.id);
        });
        changed |= ui
            .checkbox(&mut self.saved.settings.checks, "assumption checks")
            .on_hover_text(
                "Box's M, Mardia's tests, Shapiro–Wilk, outliers and the unequal-covariance test",
            )
            .changed();
        ui.horizontal(|ui| {
            let label = ui.label("permutations");
            let r = ui
                .add(
                    egui::DragValue::new(&mut self.saved.settings.permutations)
                        .range(0..=999_999)
                        .speed(100.0),
                )
                .labelled_by(label.id)
                .on_hover_text("Relabellings for the permutation p-value; 0 skips it");
            changed |= settled(&r);
        });
        if changed {
            self.rerun();
        }
    }

    fn central_ui(&mut self, ui: &mut egui::Ui) {
        let mut dismiss = None;
        for (k, m) in self.messages.iter().enumerate() {
            egui::Frame::group(ui.style())
                .fill(ui.visuals().error_fg_color.gamma_multiply(0.15))
                .show(ui, |ui| {
                    ui.horizontal_wrapped(|ui| {
                        ui.label(RichText::new(m).color(ui.visuals().error_fg_color));
                        if ui.button("Dismiss").clicked() {
                            dismiss = Some(k);
                        }
                    });
                });
        }
        if let Some(k) = dismiss {
            self.messages.remove(k);
        }
        if let Some(n) = &self.notice {
            let mut close = false;
            ui.horizontal(|ui| {
                ui.label(n);
                close = ui.small_button("OK").clicked();
            });
            if close {
                self.notice = None;
            }
        }
        ui.horizontal(|ui| {
            for v in View::ALL {
                ui.selectable_value(&mut self.saved.view, v, v.title());
            }
            if self.shown.is_some() && !self.shown_current {
                ui.separator();
                ui.label(
                    RichText::new(if self.worker.busy() {
                        "updating — results shown are from the previous run"
                    } else {
                        "results shown are from a previous run"
                    })
                    .color(ui.visuals().warn_fg_color),
                );
            }
        });
        if let Some(e) = &self.run_error {
            ui.label(
                RichText::new(format!("The comparison could not be made: {e}"))
                    .color(ui.visuals().error_fg_color),
            );
        }
        ui.separator();
        if self.saved.view == View::Specification {
            self.specification_view(ui);
            return;
        }
        let Some(shown) = self.shown.as_deref_mut() else {
            ui.label(if self.worker.busy() {
                "Working…"
            } else if self.slots.iter().all(Option::is_some) {
                "No result to show yet."
            } else {
                "Drop two lot files on this window, or use Open lots…"
            });
            return;
        };
        match self.saved.view {
            View::Verdict => overview::overview_ui(ui, shown, &mut self.saved.view),
            View::Characteristics => characteristics::table_ui(ui, shown, &mut self.saved),
            View::Intervals => intervals::intervals_ui(ui, shown),
            View::Pairs => pairs::pairs_ui(ui, shown, &mut self.saved),
            View::Direction => direction::direction_ui(ui, shown),
            View::Specification => {}
        }
    }

    fn specification_view(&mut self, ui: &mut egui::Ui) {
        let matched = self.characteristic_list(false);
        let compared = self.characteristic_list(true);
        self.spec_editor.ensure(&matched);
        let rule_margins = self
            .shown
            .as_ref()
            .and_then(|s| s.comparison.decision.as_ref())
            .map(|d| {
                d.specification
                    .characteristics
                    .iter()
                    .filter(|e| e.margin_from == Some(crate::analysis::decision::MarginFrom::Rule))
                    .filter_map(|e| Some((match_key(&e.characteristic), e.margin?)))
                    .collect()
            })
            .unwrap_or_default();
        let cx = specification::Context {
            matched: &matched,
            compared: &compared,
            applied: &self.spec,
            rule_margins,
            lots_loaded: self.slots.iter().all(Option::is_some),
        };
        match specification::specification_ui(ui, &mut self.spec_editor, &cx) {
            specification::Action::None => {}
            specification::Action::Load => self.worker.choose(Purpose::Specification),
            specification::Action::Save => self.save_spec_to(None),
            specification::Action::Apply => self.apply_spec(),
        }
    }

    fn screenshot_step(&mut self, ctx: &egui::Context) {
        let Some(plan) = &mut self.screenshot else {
            return;
        };
        if plan.started.elapsed() > std::time::Duration::from_secs(180) {
            if let Ok(mut d) = plan.done.lock() {
                *d = Some(Err("no result to show within 180 s".into()));
            }
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
            return;
        }
        let finished = plan.done.lock().map(|d| d.is_some()).unwrap_or(true);
        if finished {
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
            return;
        }
        let ready = (self.shown.is_some() || !self.messages.is_empty() || self.run_error.is_some())
            && !self.worker.busy();
        if ready {
            plan.frames_ready += 1;
        }
        if plan.frames_ready > 5 && !plan.requested {
            plan.requested = true;
            let path = plan.path.clone();
            let done = plan.done.clone();
            let repaint = ctx.clone();
            ctx.request_screenshot(move |img| {
                let [w, h] = img.size;
                let result = image::save_buffer(
                    &path,
                    img.as_raw(),
                    w as u32,
                    h as u32,
                    image::ExtendedColorType::Rgba8,
                )
                .map_err(|e| format!("{}: {e}", path.display()));
                if let Ok(mut d) = done.lock() {
                    *d = Some(result);
                }
                repaint.request_repaint();
            });
        }
        ctx.request_repaint();
    }
}

/// A dragged value counts once the drag ends (a typed or stepped value at once), so dragging
/// does not start a run every frame.
fn settled(r: &egui::Response) -> bool {
    r.changed() && !r.dragged() || r.drag_stopped()
}

/// A small square in `color` as a legend key, filled or as an outline (the lots' marker
/// fills, see [`crate::palette`]).
pub fn swatch(ui: &mut egui::Ui, color: Color32, filled: bool) {
    let (rect, _) = ui.allocate_exact_size(egui::vec2(12.0, 12.0), egui::Sense::hover());
    if !filled {
        ui.painter().rect_stroke(
            rect.shrink(1.0),
            2.0,
            egui::Stroke::new(2.0, color),
            egui::StrokeKind::Inside,
        );
    } else {
        ui.painter().rect_filled(rect, 2.0, color);
    }
}

fn s_missing(shown: Option<&Shown>, lot: usize) -> Vec<String> {
    let Some(s) = shown else { return Vec::new() };
    s.prepared
        .characteristics
        .iter()
        .zip(&s.prepared.lots[lot].missing)
        .filter(|(_, m)| **m > 0)
        .map(|(c, m)| format!("{m} in {c}"))
        .collect()
}

fn sanitize(s: &str) -> String {
    s.chars()
        .map(|c| {
            if c.is_alphanumeric() || c == '-' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

/// p-value and statistic line used by several views.
pub fn test_line(s: &Shown) -> String {
    crate::analysis::test_statistics(&s.comparison.hotelling, 5)
}

impl eframe::App for LotshiftApp {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        self.show(ui);
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        if self.screenshot.is_none() {
            eframe::set_value(storage, eframe::APP_KEY, &self.saved);
        }
    }
}
