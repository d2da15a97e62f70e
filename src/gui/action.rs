//! What the panels and views ask the window to do. They draw from borrowed state and return
//! actions; the app applies them in one place ([`crate::gui::app::LotshiftApp::apply`]),
//! so no panel or view changes the app's state itself (a view changes only its own state:
//! the text in the specification editor's cells).

use std::path::PathBuf;

use crate::analysis::Settings;

use super::state::View;
use super::worker::Slot;

/// One thing to do, as a button, a shortcut, a dropped file or an edit asks.
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// Open a file dialog for lot files.
    PickLots(Slot),
    /// Read these files into a slot (recent files, dropped files).
    LoadPaths(Slot, Vec<PathBuf>),
    /// Read the bundled sample lots.
    LoadSamples,
    /// Open the form that reads both lots from a database.
    OpenDatabaseForm,
    /// Close that form (what it holds stays for this session).
    CloseDatabaseForm,
    /// Fill the form from the remembered source with this index.
    UseRecentSource(usize),
    /// Read the lots (or compare inside the database) as the form says, in the background.
    RunDatabase,
    /// Make the candidate the reference and vice versa.
    SwapLots,
    /// The roles of two files loaded together are right: stop asking.
    ConfirmRoles,
    /// Compare a candidate column with a reference column of another name as one
    /// characteristic, for this session (a run follows).
    PairColumns {
        /// The reference lot's column name.
        reference: String,
        /// The candidate lot's column name as read.
        candidate: String,
    },
    /// Undo a pairing (a run follows).
    UnpairColumns {
        /// The reference lot's column name.
        reference: String,
        /// The candidate lot's column name as read.
        candidate: String,
    },
    /// Split the file holding both lots by this column into these two lot values (the
    /// reference first). With two equal values the choice is kept and nothing is split yet.
    SplitBy {
        /// The lot column.
        column: String,
        /// The reference and candidate lot values.
        values: [String; 2],
    },
    /// Tick or untick a characteristic (by its match key).
    SetCompared {
        /// Match key of the characteristic.
        key: String,
        /// Compare it.
        compared: bool,
    },
    /// New analysis settings (a run follows only with [`Action::Rerun`]).
    Settings(Box<Settings>),
    /// Coverage of the data ellipses (drawn from the result; no run).
    SetCoverage(f64),
    /// Compare the current lots, selection, settings and specification.
    Rerun,
    /// Set a unit aside with a recorded reason (a run follows).
    SetUnitAside {
        /// 0 reference, 1 candidate.
        lot: usize,
        /// The unit's row in its lot file.
        row: u32,
        /// The unit's labels, `[header, value]`.
        labels: Vec<(String, String)>,
        /// Why.
        reason: String,
    },
    /// Put a unit set aside back (a run follows).
    RestoreUnit {
        /// 0 reference, 1 candidate.
        lot: usize,
        /// The unit's row in its lot file.
        row: u32,
    },
    /// Cancel the comparison under way.
    CancelRun,
    /// Open a tab.
    ShowView(View),
    /// Sort the characteristics table by this column (again: the other way).
    SortTable(usize),
    /// Show this pair of characteristics (x, y) in the pair view.
    SelectPair([String; 2]),
    /// Show the grid of leading pairs.
    ShowPairGrid(bool),
    /// Draw the mean-difference region as the shadow of the full T² region (else the pair
    /// alone).
    DifferenceShadow(bool),
    /// Open a dialog for a specification file.
    PickSpec,
    /// Open a dialog for a comparison protocol.
    PickProtocol,
    /// Run under the protocol in this file: its lots, characteristics, settings and
    /// specification.
    LoadProtocol(PathBuf),
    /// Record the differences from the protocol shown as deviations, with the reason typed,
    /// and compare.
    AcceptDeviations(String),
    /// Stop running under the protocol (the settings stay as they are).
    CloseProtocol,
    /// Save the specification as CSV, to this path or where a dialog says.
    SaveSpec(Option<PathBuf>),
    /// An edit of the specification is done: apply it (a new run when it checks).
    ApplySpec,
    /// Save the comparison record (a dialog asks where).
    Export,
    /// Open the signing form.
    OpenSigning,
    /// Close the signing form.
    CloseSigning,
    /// Open a dialog for an existing signing key.
    PickSigningKey,
    /// Open a dialog for the folder to create a signing key in.
    PickKeyFolder,
    /// Sign the result with the remembered key and save the signed summary, to this path or
    /// where a dialog says.
    Sign(Option<PathBuf>),
    /// Add a signature, with the form's name, meaning, comment and key, to a signed summary:
    /// this one, or one chosen in a dialog.
    AddSignature(Option<PathBuf>),
    /// Open a dialog for a signed summary to check.
    PickSummary,
    /// Check this signed summary against the loaded lots and the current result.
    CheckSummary(PathBuf),
    /// Dismiss the message with this index.
    Dismiss(usize),
    /// Close the confirmation line.
    CloseNotice,
}
