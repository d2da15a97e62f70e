//! The window's bars: the top bar (files, swap, signing, export, progress), the keyboard
//! shortcuts and dropped files, the messages above the views, and the tab bar with the
//! result's state. Each draws from borrowed state and returns [`Action`]s.

use std::path::PathBuf;

use egui::{Key, KeyboardShortcut, Modifiers, RichText};

use super::action::Action;
use super::state::{ResultState, View};
use super::worker::Slot;

/// Shortcut: open lot files.
pub const OPEN: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::O);
/// Shortcut: swap reference and candidate.
pub const SWAP: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::R);
/// Shortcut: export the record.
pub const EXPORT: KeyboardShortcut = KeyboardShortcut::new(Modifiers::COMMAND, Key::E);

/// What the top bar shows.
pub struct Top<'a> {
    /// Both lots are loaded.
    pub lots_loaded: bool,
    /// A result is on screen.
    pub result_shown: bool,
    /// Recently opened files, newest first.
    pub recent: &'a [String],
    /// The slot a recent file goes to.
    pub next_slot: Slot,
    /// Stage and fraction of the comparison under way.
    pub progress: Option<(String, f64)>,
    /// Files are being read (or a comparison runs).
    pub busy: bool,
}

/// The top bar.
pub fn top_ui(ui: &mut egui::Ui, top: &Top, actions: &mut Vec<Action>) {
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
            actions.push(Action::PickLots(Slot::Both));
        }
        if ui
            .button("Open one file with a lot column…")
            .on_hover_text("Both lots in one file, told apart by a column such as lot or route")
            .clicked()
        {
            actions.push(Action::PickLots(Slot::Combined));
        }
        if ui
            .button("Open protocol…")
            .on_hover_text(
                "Run a comparison protocol: lots, characteristics, settings and specification \
                 fixed in advance; a change afterwards is recorded as a deviation with its reason",
            )
            .clicked()
        {
            actions.push(Action::PickProtocol);
        }
        if ui
            .add_enabled(top.lots_loaded, egui::Button::new("Swap lots"))
            .on_hover_text(format!(
                "Make the candidate the reference and vice versa ({})",
                ui.ctx().format_shortcut(&SWAP)
            ))
            .clicked()
        {
            actions.push(Action::SwapLots);
        }
        if ui
            .add_enabled(top.result_shown, egui::Button::new("Sign and export…"))
            .on_hover_text("Sign the comparison with your key and save the signed summary")
            .clicked()
        {
            actions.push(Action::OpenSigning);
        }

        if ui
            .button("Check a signed summary…")
            .on_hover_text("Open a signed summary and check its signature (and, with its lots loaded, its numbers)")
            .clicked()
        {
            actions.push(Action::PickSummary);
        }
        if ui
            .add_enabled(top.result_shown, egui::Button::new("Export record…"))
            .on_hover_text(format!(
                "Save the comparison record as JSON ({})",
                ui.ctx().format_shortcut(&EXPORT)
            ))
            .clicked()
        {
            actions.push(Action::Export);
        }
        if !top.recent.is_empty() {
            ui.menu_button("Recent", |ui| {
                for r in top.recent {
                    if ui.button(r).clicked() {
                        actions.push(Action::LoadPaths(top.next_slot, vec![PathBuf::from(r)]));
                    }
                }
            });
        }
        if ui
            .button("Sample lots")
            .on_hover_text("Load the bundled, invented sample lots")
            .clicked()
        {
            actions.push(Action::LoadSamples);
        }
        ui.separator();
        if let Some((stage, f)) = &top.progress {
            ui.add(
                egui::ProgressBar::new(*f as f32)
                    .desired_width(160.0)
                    .text(format!("computing: {stage}")),
            );
            if ui.button("Cancel").clicked() {
                actions.push(Action::CancelRun);
            }
        } else if top.busy {
            ui.spinner();
            ui.label("reading files…");
        }
    });
}

/// The keyboard shortcuts, and files dropped on the window (one: into `next_slot`; more:
/// the first two by name, as reference and candidate).
pub fn shortcuts(ctx: &egui::Context, next_slot: Slot) -> Vec<Action> {
    let mut actions = Vec::new();
    let (open, swap, export) = ctx.input_mut(|i| {
        (
            i.consume_shortcut(&OPEN),
            i.consume_shortcut(&SWAP),
            i.consume_shortcut(&EXPORT),
        )
    });
    if open {
        actions.push(Action::PickLots(Slot::Both));
    }
    if swap {
        actions.push(Action::SwapLots);
    }
    if export {
        actions.push(Action::Export);
    }
    let mut dropped: Vec<PathBuf> = ctx.input(|i| {
        i.raw
            .dropped_files
            .iter()
            .map(|f| f.path().to_path_buf())
            .collect()
    });
    match dropped.len() {
        0 => {}
        1 => actions.push(Action::LoadPaths(next_slot, dropped)),
        _ => {
            dropped.sort();
            dropped.truncate(2);
            actions.push(Action::LoadPaths(Slot::Both, dropped));
        }
    }
    actions
}

/// The messages (each dismissible) and the confirmation line.
pub fn messages_ui(
    ui: &mut egui::Ui,
    messages: &[String],
    notice: Option<&str>,
    actions: &mut Vec<Action>,
) {
    for (k, m) in messages.iter().enumerate() {
        egui::Frame::group(ui.style())
            .fill(ui.visuals().error_fg_color.gamma_multiply(0.15))
            .show(ui, |ui| {
                ui.horizontal_wrapped(|ui| {
                    ui.label(RichText::new(m).color(ui.visuals().error_fg_color));
                    if ui.button("Dismiss").clicked() {
                        actions.push(Action::Dismiss(k));
                    }
                });
            });
    }
    if let Some(n) = notice {
        ui.horizontal(|ui| {
            ui.label(n);
            if ui.small_button("OK").clicked() {
                actions.push(Action::CloseNotice);
            }
        });
    }
}

/// The tabs, whether the result shown is the current one (`busy`: a run or a load is under
/// way), and why the latest run gave none.
pub fn tabs_ui(
    ui: &mut egui::Ui,
    view: View,
    result: &ResultState,
    busy: bool,
    actions: &mut Vec<Action>,
) {
    ui.horizontal(|ui| {
        for v in View::ALL {
            if ui.selectable_label(view == v, v.title()).clicked() && view != v {
                actions.push(Action::ShowView(v));
            }
        }
        if result.shown().is_some() && !result.is_current() {
            ui.separator();
            ui.label(
                RichText::new(if busy {
                    "updating — results shown are from the previous run"
                } else {
                    "results shown are from a previous run"
                })
                .color(ui.visuals().warn_fg_color),
            );
        }
    });
    if let Some(e) = result.error() {
        ui.label(
            RichText::new(format!("The comparison could not be made: {e}"))
                .color(ui.visuals().error_fg_color),
        );
    }
    ui.separator();
}
