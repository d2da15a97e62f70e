//! The specification view: the editor's table of limits and margins for the compared
//! characteristics, the margin rule, the distance margin, loading and saving specification
//! files. The cells are the view's own state ([`SpecEditor`]); it asks for the rest with
//! [`Action`]s.
//!
//! Cells are checked as they are typed (the problem shows beside the cell) and applied, as a
//! new run, when an edit is done: on leaving the cell or pressing Enter. A run never starts
//! with a cell that does not check.

use std::collections::HashMap;

use egui::RichText;

use crate::analysis::decision::MarginFrom;
use crate::data::match_key;
use crate::data::spec::Spec;
use crate::pipeline::SpecRequest;

use super::action::Action;
use super::shown::Shown;
use super::spec_cells::Cell;
use super::spec_editor::{Characteristic, RuleChoice, SpecEditor};
use super::words::{EDITED, MARGIN_CAUTION};

/// What the view shows besides the editor.
pub struct Context<'a> {
    /// The characteristics both lots have.
    pub matched: &'a [Characteristic],
    /// The characteristics compared now (ticked in the side panel).
    pub compared: &'a [Characteristic],
    /// The specification of the latest run.
    pub applied: &'a SpecRequest,
    /// Margins the rule gave in the result shown, by characteristic key.
    pub rule_margins: HashMap<String, [f64; 2]>,
    /// Both lots are loaded.
    pub lots_loaded: bool,
}

/// The margins the margin rule gave in `shown`, by characteristic key (shown as hints in
/// the empty margin cells).
pub fn rule_margins(shown: Option<&Shown>) -> HashMap<String, [f64; 2]> {
    shown
        .and_then(|s| s.comparison.decision.as_ref())
        .map(|d| {
            d.specification
                .characteristics
                .iter()
                .filter(|e| e.margin_from == Some(MarginFrom::Rule))
                .filter_map(|e| Some((match_key(&e.characteristic), e.margin?)))
                .collect()
        })
        .unwrap_or_default()
}

/// One cell: a single-line text box named for screen readers (and tests) "characteristic:
/// cell", tinted with its problem beside it. Returns true when an edit is done (focus left
/// the cell or Enter was pressed) .
fn cell(
    ui: &mut egui::Ui,
    text: &mut String,
    name: String,
    problem: Option<&str>,
    hint: &str,
    width: f32,
) -> bool {
    // An id from the cell's name, not from its place: a line appearing above the table (a
    // result arriving, a message) must not move the focus out of the cell being typed in.
    let mut edit = egui::TextEdit::singleline(text)
        .id_salt(&name)
        .desired_width(width)
        .hint_text(hint.to_string());
    if problem.is_some() {
        edit = edit.background_color(ui.visuals().error_fg_color.gamma_multiply(0.22));
    }
    let r = ui.add_sized(egui::vec2(width, ui.spacing().interact_size.y), edit);
    ui.ctx()
        .accesskit_node_builder(r.id, |b| b.set_label(name.clone()));
    let done = r.lost_focus();
    if let Some(p) = problem {
        r.on_hover_text(p);
    }
    done
}

fn problem_of(problems: &[(Cell, String)], c: Cell) -> Option<&str> {
    problems
        .iter()
        .find(|(k, _)| *k == c)
        .map(|(_, p)| p.as_str())
}

fn identity(spec: Option<&Spec>) -> String {
    match spec {
        None => "no limits or margins in the table".into(),
        Some(s) if s.file_name == EDITED => format!(
            "edited in the window, not saved (SHA-256 of its CSV form {}…)",
            &s.sha256[..12.min(s.sha256.len())]
        ),
        Some(s) => format!(
            "{} (SHA-256 {}…)",
            s.file_name,
            &s.sha256[..12.min(s.sha256.len())]
        ),
    }
}

/// Draws the specification view.
pub fn specification_ui(
    ui: &mut egui::Ui,
    ed: &mut SpecEditor,
    cx: &Context,
    actions: &mut Vec<Action>,
) {
    ed.ensure(cx.matched);
    // One request a frame: the last one asked for.
    let mut action = None;
    egui::ScrollArea::vertical().show(ui, |ui| {
        ui.heading("Specification limits and equivalence margins");
        ui.label(
            RichText::new(MARGIN_CAUTION)
                .strong()
                .color(ui.visuals().warn_fg_color),
        );
        ui.add_space(4.0);
        let current = ed.request(cx.compared);
        ui.horizontal_wrapped(|ui| {
            if ui
                .button("Load a specification file…")
                .on_hover_text(
                    "A table with a characteristic column and any of lower, target, upper, \
                     margin, margin_lower, margin_upper (CSV, TSV or a spreadsheet)",
                )
                .clicked()
            {
                action = Some(Action::PickSpec);
            }
            let can_save = current.as_ref().is_ok_and(|r| r.file.is_some());
            if ui
                .add_enabled(can_save, egui::Button::new("Save as CSV…"))
                .on_hover_text(
                    "Write the table as a specification file; the record then names that file \
                     and its SHA-256",
                )
                .on_disabled_hover_text("Nothing to save, or a cell has a problem")
                .clicked()
            {
                action = Some(Action::SaveSpec(None));
            }
            if ui
                .add_enabled(
                    ed.rows.iter().any(|r| !r.is_blank()),
                    egui::Button::new("Clear the table"),
                )
                .clicked()
            {
                ed.clear();
                action = Some(Action::ApplySpec);
            }
        });
        match &current {
            Err(problems) => {
                ui.label(
                    RichText::new(format!(
                        "{} to fix: no new run starts until every cell checks; the result \
                         shown uses the specification applied before.",
                        if problems.len() == 1 {
                            "1 problem".to_string()
                        } else {
                            format!("{} problems", problems.len())
                        }
                    ))
                    .color(ui.visuals().error_fg_color),
                );
            }
            Ok(req) if req == cx.applied => {
                ui.label(format!(
                    "Applied to the result: {}.",
                    identity(req.file.as_ref())
                ));
            }
            Ok(_) if !cx.lots_loaded => {
                ui.weak("Applied to the next comparison, once two lots are loaded.");
            }
            Ok(_) => {
                ui.weak("Not applied yet: press Enter or leave the cell.");
            }
        }
        ui.add_space(6.0);
        if cx.compared.is_empty() {
            ui.weak(if cx.lots_loaded {
                "No characteristic is ticked for comparison."
            } else {
                "Load two lots: the table has one row per compared characteristic."
            });
        } else {
            egui::ScrollArea::horizontal()
                .id_salt("spec-table-scroll")
                .show(ui, |ui| table_ui(ui, ed, cx, &mut action));
            ui.label(
                RichText::new(
                    "Margin: how far the candidate lot's mean may lie from the reference lot's \
                     mean (candidate − reference) and still count as equivalent, in the \
                     characteristic's unit: ± the same both ways, or below and above when \
                     asymmetric. A blank cell means not given.",
                )
                .weak(),
            );
        }
        not_compared_ui(ui, ed, cx, &mut action);
        ui.add_space(8.0);
        rule_ui(ui, ed, &mut action);
        ui.add_space(8.0);
        distance_ui(ui, ed, &mut action);
    });
    actions.extend(action);
}

fn table_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, cx: &Context, action: &mut Option<Action>) {
    const W: f32 = 86.0;
    egui::Grid::new("spec-table")
        .striped(true)
        .num_columns(8)
        .min_col_width(40.0)
        .show(ui, |ui| {
            for h in [
                "characteristic",
                "unit",
                "lower limit",
                "target",
                "upper limit",
                "margin (candidate − reference)",
                "",
                "",
            ] {
                ui.strong(h);
            }
            ui.end_row();
            for (name, unit) in cx.compared {
                let key = match_key(name);
                let Some(row) = ed.rows.iter_mut().find(|r| r.key == key) else {
                    continue;
                };
                let problems = row.check().err().unwrap_or_default();
                let p = |c| problem_of(&problems, c);
                ui.label(name);
                ui.label(
                    unit.clone()
                        .or_else(|| row.unit.clone())
                        .unwrap_or_default(),
                );
                let mut done = false;
                done |= cell(
                    ui,
                    &mut row.lower,
                    format!("{name}: lower limit"),
                    p(Cell::Lower),
                    "",
                    W,
                );
                done |= cell(
                    ui,
                    &mut row.target,
                    format!("{name}: target"),
                    p(Cell::Target),
                    "",
                    W,
                );
                done |= cell(
                    ui,
                    &mut row.upper,
                    format!("{name}: upper limit"),
                    p(Cell::Upper),
                    "",
                    W,
                );
                ui.horizontal(|ui| {
                    if row.asymmetric {
                        ui.label("−");
                        done |= cell(
                            ui,
                            &mut row.below,
                            format!("{name}: margin below"),
                            p(Cell::Below),
                            "below",
                            W * 0.8,
                        );
                        ui.label("+");
                        done |= cell(
                            ui,
                            &mut row.above,
                            format!("{name}: margin above"),
                            p(Cell::Above),
                            "above",
                            W * 0.8,
                        );
                    } else {
                        ui.label("±");
                        let hint = cx
                            .rule_margins
                            .get(&key)
                            .map(|m| {
                                format!("rule: {}", crate::analysis::format_sig(m[1].max(-m[0]), 3))
                            })
                            .unwrap_or_default();
                        done |= cell(
                            ui,
                            &mut row.margin,
                            format!("{name}: margin"),
                            p(Cell::Margin),
                            &hint,
                            W,
                        );
                    }
                });
                let mut asym = row.asymmetric;
                if ui
                    .checkbox(&mut asym, "asymmetric")
                    .on_hover_text("Different margins below and above the reference lot's mean")
                    .changed()
                {
                    row.set_asymmetric(asym);
                    done = true;
                }
                if problems.is_empty() {
                    ui.label("");
                } else {
                    ui.vertical(|ui| {
                        for (c, p) in &problems {
                            ui.label(
                                RichText::new(format!("{}: {p}", c.words()))
                                    .color(ui.visuals().error_fg_color),
                            );
                        }
                    });
                }
                ui.end_row();
                if done {
                    *action = Some(Action::ApplySpec);
                }
            }
        });
}

fn not_compared_ui(
    ui: &mut egui::Ui,
    ed: &mut SpecEditor,
    cx: &Context,
    action: &mut Option<Action>,
) {
    let compared: Vec<String> = cx.compared.iter().map(|(n, _)| match_key(n)).collect();
    let others: Vec<usize> = (0..ed.rows.len())
        .filter(|&k| !compared.contains(&ed.rows[k].key) && !ed.rows[k].is_blank())
        .collect();
    if others.is_empty() {
        return;
    }
    ui.add_space(6.0);
    ui.label(
        RichText::new(
            "In the table but not compared now, so left out of the specification applied:",
        )
        .italics(),
    );
    let matched: Vec<String> = cx.matched.iter().map(|(n, _)| match_key(n)).collect();
    let mut remove = None;
    for k in others {
        let r = &ed.rows[k];
        let mut parts = Vec::new();
        for (label, text) in [
            ("lower", &r.lower),
            ("target", &r.target),
            ("upper", &r.upper),
        ] {
            if !text.trim().is_empty() {
                parts.push(format!("{label} {}", text.trim()));
            }
        }
        if r.asymmetric {
            parts.push(format!("margin −{} +{}", r.below.trim(), r.above.trim()));
        } else if !r.margin.trim().is_empty() {
            parts.push(format!("margin ±{}", r.margin.trim()));
        }
        let why = if matched.contains(&r.key) {
            "unticked"
        } else {
            "not in both lots"
        };
        ui.horizontal(|ui| {
            ui.label(format!(
                "{} ({why}): {}",
                r.characteristic,
                parts.join(", ")
            ));
            if ui.small_button("Remove").clicked() {
                remove = Some(k);
            }
        });
    }
    if let Some(k) = remove {
        ed.rows.remove(k);
        *action = Some(Action::ApplySpec);
    }
}

fn rule_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, action: &mut Option<Action>) {
    ui.strong("Margins for the characteristics the table gives none");
    let problem = ed.rule().err();
    let before = ed.rule;
    ui.radio_value(
        &mut ed.rule,
        RuleChoice::FileOnly,
        "none: only the margins in the table",
    );
    ui.horizontal(|ui| {
        ui.radio_value(
            &mut ed.rule,
            RuleChoice::ToleranceFraction,
            "a fraction of the tolerance width (upper − lower limit; needs both limits):",
        );
        let p = (ed.rule == RuleChoice::ToleranceFraction)
            .then_some(problem.as_deref())
            .flatten();
        if cell(
            ui,
            &mut ed.fraction,
            "margin rule: fraction of the tolerance width".into(),
            p,
            "e.g. 0.1",
            60.0,
        ) {
            *action = Some(Action::ApplySpec);
        }
        if let Some(p) = p {
            ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
        }
    });
    ui.horizontal(|ui| {
        ui.radio_value(
            &mut ed.rule,
            RuleChoice::ReferenceSd,
            "a multiple of the reference lot's standard deviation:",
        );
        let p = (ed.rule == RuleChoice::ReferenceSd)
            .then_some(problem.as_deref())
            .flatten();
        if cell(
            ui,
            &mut ed.sd,
            "margin rule: multiple of the reference SD".into(),
            p,
            "e.g. 0.5",
            60.0,
        ) {
            *action = Some(Action::ApplySpec);
        }
        if let Some(p) = p {
            ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
        }
    });
    if ed.rule != before {
        *action = Some(Action::ApplySpec);
    }
}

fn distance_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, action: &mut Option<Action>) {
    ui.strong("Margin on the distance between the lot means (ε)");
    let problem = ed.distance_margin().err();
    ui.horizontal(|ui| {
        ui.label("ε, a Mahalanobis distance (in pooled standard deviations):");
        if cell(
            ui,
            &mut ed.distance,
            "distance margin".into(),
            problem.as_deref(),
            "none",
            70.0,
        ) {
            *action = Some(Action::ApplySpec);
        }
        if let Some(p) = &problem {
            ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
        }
    });
    ui.label(
        RichText::new(
            "Used by the multivariate equivalence test. Blank: when every characteristic has a \
             margin, the test derives ε from the margins and the pooled covariance of these \
             data, and its level then holds only approximately.",
        )
        .small()
        .weak(),
    );
}
