//! The desktop window (eframe/egui + egui_plot). It renders finished results; all statistics
//! run in a background worker.
//!
//! Imports go one way: the views and panels import only the shared modules (`action`,
//! `state`, `shown`, `theme`, `widgets`, `words`, their own state's module) and never `app`,
//! which imports them all and applies their [`action::Action`]s and the worker's
//! [`worker::Outcome`]s in one place.

pub mod action;
pub mod app;
pub mod characteristics;
pub mod database;
pub mod direction;
pub mod intervals;
pub mod jobs;
pub mod lots;
pub mod overview;
pub mod pairs;
pub mod protocol_panel;
pub mod screenshot;
pub mod shown;
pub mod side;
pub mod signing;
pub mod spec_cells;
pub mod spec_editor;
pub mod specification;
pub mod state;
pub mod theme;
pub mod toolbar;
pub mod widgets;
pub mod words;
pub mod worker;

use std::path::PathBuf;
use std::process::ExitCode;

use crate::exit::EXIT_BAD_INPUT;

pub use app::LotshiftApp;
pub use state::{ResultState, Saved, View};

/// Opens the window (with `files`, or the bundled sample lots), or renders it to `screenshot`
/// and exits.
pub fn run(files: Vec<PathBuf>, screenshot: Option<PathBuf>, view: Option<String>) -> ExitCode {
    run_with_spec(files, screenshot, view, None, None)
}

/// As [`run`], with a specification file (limits and margins) loaded into the
/// Specification tab at start, as if opened there (a bad file shows the loader's message in
/// the window; the lots and the comparison go ahead without it), and with a comparison
/// protocol run from the start (its lots in place of the sample lots when no files are given).
pub fn run_with_spec(
    files: Vec<PathBuf>,
    screenshot: Option<PathBuf>,
    view: Option<String>,
    spec: Option<PathBuf>,
    protocol: Option<PathBuf>,
) -> ExitCode {
    if !(files.is_empty() || files.len() == 2) {
        eprintln!(
            "lotshift: error: give two lot files (reference, then candidate), or none for the sample lots"
        );
        return ExitCode::from(EXIT_BAD_INPUT);
    }
    let start_view = match view.as_deref().map(View::from_name) {
        None => None,
        Some(Some(v)) => Some(v),
        Some(None) => {
            eprintln!(
                "lotshift: error: unknown view; use one of: {}",
                View::ALL.map(View::name).join(", ")
            );
            return ExitCode::from(EXIT_BAD_INPUT);
        }
    };
    let taking_screenshot = screenshot.is_some();
    let options = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_title("lotshift — compare two lots")
            .with_inner_size([1400.0, 900.0])
            .with_min_inner_size([800.0, 500.0])
            .with_drag_and_drop(true),
        persist_window: !taking_screenshot,
        ..Default::default()
    };
    let result_slot = std::sync::Arc::new(std::sync::Mutex::new(None));
    let slot_for_app = result_slot.clone();
    let run = eframe::run_native(
        "lotshift",
        options,
        Box::new(move |cc| {
            let saved = if taking_screenshot {
                Saved::default()
            } else {
                cc.storage
                    .and_then(|s| eframe::get_value::<Saved>(s, eframe::APP_KEY))
                    .unwrap_or_default()
            };
            let mut app = LotshiftApp::new(Some(cc.egui_ctx.clone()), saved);
            if !taking_screenshot {
                app.trail = crate::report::trail::Trail::default_path()
                    .map(crate::report::trail::Trail::at);
            }
            if let Some(v) = start_view {
                app.saved.view = v;
            }
            let given = !files.is_empty();
            match (&protocol, given) {
                (Some(p), false) => app.load_protocol(p),
                (_, false) => app.load_samples(),
                (_, true) => app.load_in_order(files),
            }
            if let (Some(p), true) = (&protocol, given) {
                app.load_protocol_keeping_lots(p);
            }
            if let Some(p) = spec {
                app.load_spec_path(p);
            }
            if let Some(p) = screenshot {
                app.plan_screenshot(p);
                if let Ok(mut s) = slot_for_app.lock() {
                    *s = app.screenshot_result();
                }
            }
            Ok(Box::new(app))
        }),
    );
    if let Err(e) = run {
        eprintln!("lotshift: error: cannot open the window: {e}");
        return ExitCode::from(EXIT_BAD_INPUT);
    }
    let outcome = result_slot.lock().ok().and_then(|s| s.clone());
    if let Some(done) = outcome {
        match done.lock().ok().and_then(|d| d.clone()) {
            Some(Ok(())) => {}
            Some(Err(e)) => {
                eprintln!("lotshift: error: screenshot failed: {e}");
                return ExitCode::from(EXIT_BAD_INPUT);
            }
            None => {
                eprintln!("lotshift: error: the window closed before the screenshot was taken");
                return ExitCode::from(EXIT_BAD_INPUT);
            }
        }
    }
    ExitCode::SUCCESS
}
