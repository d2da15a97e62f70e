//! The side panel: the two lot slots, the lot column of a file holding both lots, the
//! characteristics to compare and the settings. Each part draws from borrowed state and
//! returns [`Action`]s.

use egui::RichText;

use crate::analysis::Settings;
use crate::data::{Lot, match_key};

use super::action::Action;
use super::lots::{Combined, Lots, counterpart};
use super::shown::Shown;
use super::widgets::{lot_swatch, settled};
use super::worker::Slot;

/// Lot slot `i` (0 reference, 1 candidate): the file, its rows, and the units the current
/// result used.
pub fn lot_slot_ui(
    ui: &mut egui::Ui,
    i: usize,
    lots: &Lots,
    current: Option<&Shown>,
    actions: &mut Vec<Action>,
) {
    let title = if i == 0 {
        "Reference lot"
    } else {
        "Candidate lot"
    };
    ui.horizontal(|ui| {
        lot_swatch(ui, i);
        ui.strong(title);
        if lots.combined.is_none() && ui.small_button("Open…").clicked() {
            actions.push(Action::PickLots(if i == 0 {
                Slot::Reference
            } else {
                Slot::Candidate
            }));
        }
    });
    match &lots.slots[i] {
        None => {
            ui.weak("no file: drop one here or use Open…");
        }
        Some(lot) => lot_lines(ui, i, lot, current),
    }
}

fn lot_lines(ui: &mut egui::Ui, i: usize, lot: &Lot, current: Option<&Shown>) {
    let p = &lot.provenance;
    ui.label(format!("{} — \"{}\"", p.file_name, lot.name));
    // Always two lines, so the panel does not jump while a run is under way.
    ui.label(format!("{} rows read", lot.len()));
    match current.map(|s| (s, &s.prepared.lots[i])) {
        Some((s, pl)) if pl.n_excluded > 0 => {
            let why = missing_cells(s, i);
            ui.label(format!(
                "{} units used; {} left out for missing cells ({})",
                pl.kept.len(),
                pl.n_excluded,
                why.join(", ")
            ))
            .on_hover_text("A unit with a missing cell in any compared characteristic is left out of the whole analysis (listwise).");
        }
        Some((_, pl)) => {
            ui.label(format!("{} units used", pl.kept.len()));
        }
        None => {
            ui.weak("units used: when the comparison is done");
        }
    }
    for n in &p.notes {
        ui.weak(n);
    }
}

/// "2 in mass", per compared characteristic with missing cells in lot `lot`.
fn missing_cells(s: &Shown, lot: usize) -> Vec<String> {
    s.prepared
        .characteristics
        .iter()
        .zip(&s.prepared.lots[lot].missing)
        .filter(|(_, m)| **m > 0)
        .map(|(c, m)| format!("{m} in {c}"))
        .collect()
}

/// The roles two files loaded together were given, until the user confirms them: each file
/// with its role, a swap, and the confirmation. The comparison runs meanwhile.
pub fn roles_ui(ui: &mut egui::Ui, lots: &Lots, actions: &mut Vec<Action>) {
    let file = |i: usize| {
        lots.slots[i]
            .as_ref()
            .map_or_else(|| "(none)".to_owned(), |l| l.provenance.file_name.clone())
    };
    egui::Frame::group(ui.style())
        .stroke(egui::Stroke::new(1.5, ui.visuals().warn_fg_color))
        .show(ui, |ui| {
            ui.label(
                RichText::new("Which file is which lot?")
                    .strong()
                    .color(ui.visuals().warn_fg_color),
            );
            ui.label(
                "The two files were read together, and their order alone gave them their \
                 roles. Check them before reading the result:",
            );
            for (i, role) in ["reference", "candidate"].iter().enumerate() {
                ui.horizontal(|ui| {
                    lot_swatch(ui, i);
                    ui.label(format!("{role} lot: {}", file(i)));
                });
            }
            ui.horizontal(|ui| {
                if ui.button("Swap the roles").clicked() {
                    actions.push(Action::SwapLots);
                }
                if ui.button("These roles are right").clicked() {
                    actions.push(Action::ConfirmRoles);
                }
            });
        });
    ui.add_space(6.0);
}

/// The numeric columns found in one lot only, each with a click to pair it with the
/// nearest name in the other lot, and the pairings made this session with an undo.
pub fn one_lot_columns_ui(ui: &mut egui::Ui, lots: &Lots, actions: &mut Vec<Action>) {
    let one_lot = lots.one_lot_columns();
    if one_lot.is_empty() && lots.pairs.is_empty() {
        return;
    }
    ui.add_space(6.0);
    ui.strong("Columns in one lot only");
    for c in &one_lot {
        let lot = if c.lot == 0 { "reference" } else { "candidate" };
        ui.label(
            RichText::new(format!(
                "\"{}\": only in the {lot} lot, not compared",
                c.header
            ))
            .italics(),
        );
        if let Some(other) = &c.nearest {
            let (reference, candidate) = if c.lot == 0 {
                (c.name.clone(), other.clone())
            } else {
                (other.clone(), c.name.clone())
            };
            if ui
                .small_button(format!("pair with {other}"))
                .on_hover_text(format!(
                    "Compare the reference's \"{reference}\" and the candidate's \
                     \"{candidate}\" as one characteristic, for this session. The record \
                     lists the pairing."
                ))
                .clicked()
            {
                actions.push(Action::PairColumns {
                    reference,
                    candidate,
                });
            }
        }
    }
    for p in &lots.pairs {
        ui.horizontal_wrapped(|ui| {
            ui.label(format!(
                "paired: reference \"{}\" with candidate \"{}\"",
                p.reference, p.candidate
            ));
            if ui.small_button("undo").clicked() {
                actions.push(Action::UnpairColumns {
                    reference: p.reference.clone(),
                    candidate: p.candidate.clone(),
                });
            }
        });
    }
}

/// The lot column and the two lot values of a file holding both lots.
pub fn combined_ui(ui: &mut egui::Ui, c: &Combined, actions: &mut Vec<Action>) {
    ui.add_space(6.0);
    ui.strong(format!("Lots in {}", c.table.provenance.file_name));
    let mut column = c.column.clone();
    egui::ComboBox::from_label("lot column")
        .selected_text(column.clone())
        .show_ui(ui, |ui| {
            for (name, _) in &c.candidates {
                ui.selectable_value(&mut column, name.clone(), name);
            }
        });
    let values = c
        .candidates
        .iter()
        .find(|(n, _)| n == &column)
        .map(|(_, v)| v.clone())
        .unwrap_or_default();
    let mut chosen = c.values.clone();
    if column != c.column && values.len() >= 2 {
        chosen = [values[0].clone(), values[1].clone()];
    }
    for (k, label) in ["reference lot value", "candidate lot value"]
        .iter()
        .enumerate()
    {
        egui::ComboBox::from_label(*label)
            .selected_text(chosen[k].clone())
            .show_ui(ui, |ui| {
                for v in &values {
                    ui.selectable_value(&mut chosen[k], v.clone(), v);
                }
            });
    }
    ui.label(format!(
        "reference lot: the rows where {} is \"{}\"",
        c.column, c.values[0]
    ));
    ui.label(format!(
        "candidate lot: the rows where {} is \"{}\"",
        c.column, c.values[1]
    ));
    if column != c.column || chosen != c.values {
        actions.push(Action::SplitBy {
            column,
            values: chosen,
        });
    }
}

/// A tick box per characteristic both lots have, and the labels (the columns in one lot
/// only are listed under the lot slots, [`one_lot_columns_ui`]).
pub fn characteristics_ui(ui: &mut egui::Ui, lots: &Lots, actions: &mut Vec<Action>) {
    ui.strong("Characteristics to compare");
    let (Some(a), Some(b)) = (&lots.slots[0], lots.candidate()) else {
        ui.weak("load two lots to choose");
        return;
    };
    let mut changed = false;
    for c in a.columns.iter().filter(|c| c.is_numeric()) {
        if counterpart(b, c).is_none() {
            continue;
        }
        let key = match_key(&c.name);
        let mut on = !lots.excluded.contains(&key);
        let label = match &c.unit {
            Some(u) => format!("{} ({u})", c.name),
            None => c.name.clone(),
        };
        if ui.checkbox(&mut on, label).changed() {
            actions.push(Action::SetCompared { key, compared: on });
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
    if changed {
        actions.push(Action::Rerun);
    }
}

/// The analysis settings and the data-ellipse coverage.
pub fn settings_ui(
    ui: &mut egui::Ui,
    settings: &Settings,
    coverage: f64,
    actions: &mut Vec<Action>,
) {
    ui.strong("Settings");
    let mut s = settings.clone();
    let mut cov = coverage;
    let mut changed = false;
    ui.horizontal(|ui| {
        let label = ui.label("alpha");
        changed |= ui
            .add(
                egui::DragValue::new(&mut s.alpha)
                    .range(0.0001..=0.5)
                    .speed(0.001)
                    .max_decimals(4),
            )
            .labelled_by(label.id)
            .on_hover_text("Significance level of the test; intervals are at 1 - alpha confidence")
            .changed();
    });
    changed |= ui
        .checkbox(&mut s.leave_one_out, "leave-one-out misclassification")
        .changed();
    ui.horizontal(|ui| {
        let label = ui.label("data ellipse coverage");
        ui.add(
            egui::DragValue::new(&mut cov)
                .range(0.5..=0.999)
                .speed(0.005)
                .max_decimals(3),
        )
        .labelled_by(label.id);
    });
    changed |= ui
        .checkbox(&mut s.checks, "assumption checks")
        .on_hover_text(
            "Box's M, Mardia's tests, Shapiro–Wilk, outliers and the unequal-covariance test",
        )
        .changed();
    ui.horizontal(|ui| {
        let label = ui.label("permutations");
        let r = ui
            .add(
                egui::DragValue::new(&mut s.permutations)
                    .range(0..=999_999)
                    .speed(100.0),
            )
            .labelled_by(label.id)
            .on_hover_text("Relabellings for the permutation p-value; 0 skips it");
        changed |= settled(&r);
    });
    let mut early = s.sequential.is_some();
    if ui
        .checkbox(&mut early, "stop relabelling when settled")
        .on_hover_text(
            "Stop at the 10th relabelling that reaches the observed T² (Besag & Clifford), or \
             as soon as the decision at alpha is settled with at most a 0.001 chance of \
             differing from all relabellings (Gandy)",
        )
        .changed()
    {
        s.sequential = early.then(crate::analysis::Sequential::default);
        changed = true;
    }
    if s != *settings {
        actions.push(Action::Settings(Box::new(s)));
    }
    if cov != coverage {
        actions.push(Action::SetCoverage(cov));
    }
    if changed {
        actions.push(Action::Rerun);
    }
}

/// The description of the comparison for the record (part, lot identifiers, change request,
/// purpose, notes): the form's own text, edited in place. Returns whether anything changed.
pub fn fields_ui(ui: &mut egui::Ui, fields: &mut [String; 6]) -> bool {
    let mut changed = false;
    egui::CollapsingHeader::new("About this comparison (for the record)")
        .default_open(false)
        .show(ui, |ui| {
            egui::Grid::new("fields").num_columns(2).show(ui, |ui| {
                for (name, value) in crate::report::STANDARD_FIELDS.iter().zip(fields.iter_mut()) {
                    ui.label(*name);
                    changed |= ui
                        .add(egui::TextEdit::singleline(value).desired_width(170.0))
                        .changed();
                    ui.end_row();
                }
            });
            ui.weak("Printed at the top of the report and covered by the signature.");
        });
    changed
}
