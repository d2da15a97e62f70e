//! The specification view: per compared characteristic the specification limits (lower,
//! target, upper) and the equivalence margin (symmetric, or different below and above), the
//! margin rule for characteristics without one, and the margin on the distance between the
//! lot means; loaded from and saved to a specification file.
//!
//! Cells are checked as they are typed (the problem shows beside the cell) and applied, as a
//! new run, when an edit is done: on leaving the cell or pressing Enter. A run never starts
//! with a cell that does not check. What is applied is a [`Spec`]: the loaded or saved file
//! itself while the cells still say what it says, else the cells as edited, named
//! [`EDITED`] and identified by the SHA-256 of their [`to_csv`] form, so that the record's
//! name and SHA-256 always match a file (the one loaded, or the one the edits are saved to).

use std::collections::HashMap;

use egui::RichText;

use crate::analysis::decision::MarginRule;
use crate::data::match_key;
use crate::data::spec::{Spec, SpecRow, to_csv};
use crate::pipeline::SpecRequest;

use super::worker::sha256_hex;

/// File name (and path) of a specification edited in the window and not saved yet.
pub const EDITED: &str = "(edited in the window)";

/// The caution shown with the margins.
pub const MARGIN_CAUTION: &str = "Margins belong to the quality plan and are set before the \
     data are seen. Copy them from the plan: margins chosen or adjusted after looking at these \
     results do not support an equivalence claim.";

/// How characteristics without a margin in the table get one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum RuleChoice {
    /// Only the margins in the table.
    #[default]
    FileOnly,
    /// A fraction of the tolerance width.
    ToleranceFraction,
    /// A multiple of the reference lot's standard deviation.
    ReferenceSd,
}

/// One characteristic's cells, as typed.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct EditRow {
    /// Matching key of the characteristic ([`match_key`]).
    pub key: String,
    /// Characteristic name (as the file or the lot writes it).
    pub characteristic: String,
    /// Unit written with the row (the file's, or the lots').
    pub unit: Option<String>,
    /// Lower specification limit.
    pub lower: String,
    /// Target.
    pub target: String,
    /// Upper specification limit.
    pub upper: String,
    /// The margin differs below and above.
    pub asymmetric: bool,
    /// Symmetric margin (± this much).
    pub margin: String,
    /// Asymmetric margin: how far the candidate mean may lie below the reference mean.
    pub below: String,
    /// Asymmetric margin: how far the candidate mean may lie above the reference mean.
    pub above: String,
}

/// A cell of a row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cell {
    /// Lower limit.
    Lower,
    /// Target.
    Target,
    /// Upper limit.
    Upper,
    /// Symmetric margin.
    Margin,
    /// Margin below.
    Below,
    /// Margin above.
    Above,
}

impl Cell {
    /// The cell's name in messages and for screen readers.
    pub fn words(self) -> &'static str {
        match self {
            Cell::Lower => "lower limit",
            Cell::Target => "target",
            Cell::Upper => "upper limit",
            Cell::Margin => "margin",
            Cell::Below => "margin below",
            Cell::Above => "margin above",
        }
    }
}

/// A row's values once every cell checks.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct RowValues {
    /// Lower limit.
    pub lower: Option<f64>,
    /// Target.
    pub target: Option<f64>,
    /// Upper limit.
    pub upper: Option<f64>,
    /// Allowed range of candidate − reference.
    pub margin: Option<[f64; 2]>,
}

impl RowValues {
    /// Nothing given.
    pub fn is_blank(&self) -> bool {
        self.lower.is_none()
            && self.target.is_none()
            && self.upper.is_none()
            && self.margin.is_none()
    }
}

/// Reads a typed number: blank is "not given"; a single comma is read as the decimal mark.
///
/// # Errors
/// Text that is not a finite number, in words.
pub fn parse_number(text: &str) -> Result<Option<f64>, String> {
    let t = text.trim();
    if t.is_empty() {
        return Ok(None);
    }
    let normal = if !t.contains('.') && t.matches(',').count() == 1 {
        t.replace(',', ".")
    } else {
        t.to_string()
    };
    match normal.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        _ => Err(format!("\"{t}\" is not a number")),
    }
}

/// A value as a cell shows it: the shortest text that reads back to the same number.
pub fn cell_text(v: Option<f64>) -> String {
    v.map_or_else(String::new, |x| format!("{x}"))
}

/// A limit or margin for reading: as typed when short (0.0075), else four significant
/// digits (a margin a rule computed).
pub fn short_number(v: f64) -> String {
    let t = format!("{v}");
    if t.len() <= 10 {
        t
    } else {
        crate::analysis::format_sig(v, 4)
    }
}

/// A margin (allowed candidate − reference) for reading: "± 0.03", or "−0.2 to +0.3".
pub fn margin_words(m: [f64; 2]) -> String {
    if -m[0] == m[1] {
        format!("± {}", short_number(m[1]))
    } else {
        format!("−{} to +{}", short_number(-m[0]), short_number(m[1]))
    }
}

/// The share of a lot's units observed inside every limit, in words.
pub fn observed_words(share: f64) -> String {
    if share == 1.0 {
        "all units".into()
    } else {
        format!(
            "{}% of the units",
            crate::analysis::format_sig(100.0 * share, 4)
        )
    }
}

impl EditRow {
    /// An empty row for a characteristic.
    pub fn blank(name: &str, unit: Option<String>) -> Self {
        EditRow {
            key: match_key(name),
            characteristic: name.to_string(),
            unit,
            ..EditRow::default()
        }
    }

    /// The cells of a specification file's row.
    pub fn from_spec_row(r: &SpecRow) -> Self {
        let mut e = EditRow::blank(&r.characteristic, r.unit.clone());
        e.lower = cell_text(r.lower);
        e.target = cell_text(r.target);
        e.upper = cell_text(r.upper);
        match r.margin {
            Some([lo, hi]) if -lo == hi => e.margin = cell_text(Some(hi)),
            Some([lo, hi]) => {
                e.asymmetric = true;
                e.below = cell_text(Some(-lo));
                e.above = cell_text(Some(hi));
            }
            None => {}
        }
        e
    }

    /// Every cell blank.
    pub fn is_blank(&self) -> bool {
        [
            &self.lower,
            &self.target,
            &self.upper,
            &self.margin,
            &self.below,
            &self.above,
        ]
        .iter()
        .all(|t| t.trim().is_empty())
    }

    /// Switches between a symmetric and an asymmetric margin, keeping what was typed: both
    /// sides take the symmetric margin; the symmetric margin takes the smaller side.
    pub fn set_asymmetric(&mut self, asymmetric: bool) {
        if asymmetric == self.asymmetric {
            return;
        }
        if asymmetric {
            self.below = self.margin.clone();
            self.above = self.margin.clone();
        } else {
            self.margin = match (parse_number(&self.below), parse_number(&self.above)) {
                (Ok(Some(b)), Ok(Some(a))) => cell_text(Some(b.min(a))),
                (Ok(Some(_)), _) | (Ok(None), Ok(None)) | (Err(_), _) => self.below.clone(),
                (Ok(None), _) => self.above.clone(),
            };
        }
        self.asymmetric = asymmetric;
    }

    /// The row's values, or the problem of each cell that does not check: numbers that do
    /// not parse, a lower limit not below the upper one, a target outside the limits, a
    /// margin that is not positive, one side of an asymmetric margin without the other.
    ///
    /// # Errors
    /// The cells with a problem, each with the problem in words.
    pub fn check(&self) -> Result<RowValues, Vec<(Cell, String)>> {
        let mut problems = Vec::new();
        let mut read = |cell: Cell, text: &str| match parse_number(text) {
            Ok(v) => v,
            Err(e) => {
                problems.push((cell, e));
                None
            }
        };
        let lower = read(Cell::Lower, &self.lower);
        let target = read(Cell::Target, &self.target);
        let upper = read(Cell::Upper, &self.upper);
        let (margin, below, above) = if self.asymmetric {
            (
                None,
                read(Cell::Below, &self.below),
                read(Cell::Above, &self.above),
            )
        } else {
            (read(Cell::Margin, &self.margin), None, None)
        };
        if let (Some(l), Some(u)) = (lower, upper)
            && l >= u
        {
            problems.push((
                Cell::Upper,
                format!("must be above the lower limit {}", cell_text(Some(l))),
            ));
        }
        if let Some(t) = target
            && (lower.is_some_and(|l| t < l) || upper.is_some_and(|u| t > u))
        {
            problems.push((Cell::Target, "lies outside the limits".into()));
        }
        for (cell, v) in [
            (Cell::Margin, margin),
            (Cell::Below, below),
            (Cell::Above, above),
        ] {
            if v.is_some_and(|m| m <= 0.0) {
                problems.push((cell, "a margin must be above 0".into()));
            }
        }
        if self.asymmetric {
            let blank = |t: &str| t.trim().is_empty();
            if blank(&self.below) && !blank(&self.above) {
                problems.push((Cell::Below, "give both sides, or neither".into()));
            }
            if blank(&self.above) && !blank(&self.below) {
                problems.push((Cell::Above, "give both sides, or neither".into()));
            }
        }
        if !problems.is_empty() {
            return Err(problems);
        }
        let margin = match (margin, below, above) {
            (Some(m), _, _) => Some([-m, m]),
            (None, Some(b), Some(a)) => Some([-b, a]),
            _ => None,
        };
        Ok(RowValues {
            lower,
            target,
            upper,
            margin,
        })
    }
}

/// The specification as edited in the window.
#[derive(Debug, Clone, Default)]
pub struct SpecEditor {
    /// One row per characteristic seen (compared now or not).
    pub rows: Vec<EditRow>,
    /// Margin rule.
    pub rule: RuleChoice,
    /// Factor of the tolerance-width rule, as typed.
    pub fraction: String,
    /// Factor of the reference-SD rule, as typed.
    pub sd: String,
    /// Margin on the distance between the lot means, as typed (blank: none).
    pub distance: String,
    /// The file last loaded or saved, as read or written.
    pub source: Option<Spec>,
}

/// A compared characteristic: name and unit.
pub type Characteristic = (String, Option<String>);

/// A row's content: characteristic key, unit, lower / target / upper, margin.
type RowContent = (String, Option<String>, [Option<f64>; 3], Option<[f64; 2]>);

/// Content of a row for comparing specifications: everything but the file row number.
fn content(r: &SpecRow) -> RowContent {
    (
        match_key(&r.characteristic),
        r.unit.clone(),
        [r.lower, r.target, r.upper],
        r.margin,
    )
}

fn is_blank_row(r: &SpecRow) -> bool {
    r.lower.is_none() && r.target.is_none() && r.upper.is_none() && r.margin.is_none()
}

impl SpecEditor {
    /// The row of a characteristic.
    pub fn row(&self, name: &str) -> Option<&EditRow> {
        let key = match_key(name);
        self.rows.iter().find(|r| r.key == key)
    }

    /// Adds an empty row for each characteristic that has none.
    pub fn ensure(&mut self, characteristics: &[Characteristic]) {
        for (name, unit) in characteristics {
            if self.row(name).is_none() {
                self.rows.push(EditRow::blank(name, unit.clone()));
            }
        }
    }

    /// Replaces every limit and margin by a file's (the rule and the distance margin stay).
    pub fn load(&mut self, spec: Spec) {
        for r in &mut self.rows {
            *r = EditRow::blank(&r.characteristic, r.unit.clone());
        }
        for s in &spec.rows {
            let e = EditRow::from_spec_row(s);
            match self.rows.iter_mut().find(|r| r.key == e.key) {
                Some(r) => *r = e,
                None => self.rows.push(e),
            }
        }
        self.source = Some(spec);
    }

    /// Empties every cell of the table.
    pub fn clear(&mut self) {
        for r in &mut self.rows {
            *r = EditRow::blank(&r.characteristic, r.unit.clone());
        }
    }

    /// The margin rule.
    ///
    /// # Errors
    /// A factor that is blank, not a number, or out of range.
    pub fn rule(&self) -> Result<MarginRule, String> {
        let factor = |text: &str| match parse_number(text)? {
            None => Err("type the factor the quality plan gives".to_string()),
            Some(v) => Ok(v),
        };
        match self.rule {
            RuleChoice::FileOnly => Ok(MarginRule::FileOnly),
            RuleChoice::ToleranceFraction => {
                let f = factor(&self.fraction)?;
                if f > 0.0 && f <= 1.0 {
                    Ok(MarginRule::ToleranceFraction(f))
                } else {
                    Err("a fraction must lie above 0 and at most 1".into())
                }
            }
            RuleChoice::ReferenceSd => {
                let k = factor(&self.sd)?;
                if k > 0.0 {
                    Ok(MarginRule::ReferenceSd(k))
                } else {
                    Err("the multiple must be above 0".into())
                }
            }
        }
    }

    /// The margin on the distance between the lot means.
    ///
    /// # Errors
    /// Not a number, or not above zero.
    pub fn distance_margin(&self) -> Result<Option<f64>, String> {
        match parse_number(&self.distance)? {
            Some(e) if e <= 0.0 => Err("a margin must be above 0".into()),
            v => Ok(v),
        }
    }

    /// The rows of the compared characteristics that say something, in their order, numbered
    /// as [`to_csv`] writes them.
    ///
    /// # Errors
    /// Every problem of those rows, as "characteristic, cell: problem".
    pub fn rows_for(&self, compared: &[Characteristic]) -> Result<Vec<SpecRow>, Vec<String>> {
        let mut rows = Vec::new();
        let mut problems = Vec::new();
        for (name, _) in compared {
            let Some(e) = self.row(name) else { continue };
            match e.check() {
                Err(ps) => problems.extend(
                    ps.into_iter()
                        .map(|(c, p)| format!("{}, {}: {p}", e.characteristic, c.words())),
                ),
                Ok(v) if v.is_blank() => {}
                Ok(v) => rows.push(SpecRow {
                    characteristic: e.characteristic.clone(),
                    unit: e.unit.clone(),
                    lower: v.lower,
                    target: v.target,
                    upper: v.upper,
                    margin: v.margin,
                    row: rows.len() + 2,
                }),
            }
        }
        if problems.is_empty() {
            Ok(rows)
        } else {
            Err(problems)
        }
    }

    /// The specification to apply to the compared characteristics: the loaded or saved file
    /// as it is while the cells say what it says (and it names only compared
    /// characteristics), else the cells as edited ([`EDITED`], SHA-256 of their CSV form);
    /// none when no cell is filled.
    ///
    /// # Errors
    /// Every problem of the compared rows, the rule factor and the distance margin.
    pub fn request(&self, compared: &[Characteristic]) -> Result<SpecRequest, Vec<String>> {
        let rows = self.rows_for(compared);
        let rule = self.rule();
        let distance = self.distance_margin();
        let mut problems = rows.as_ref().err().cloned().unwrap_or_default();
        if let Err(e) = &rule {
            problems.push(format!("margin rule: {e}"));
        }
        if let Err(e) = &distance {
            problems.push(format!("distance margin: {e}"));
        }
        let (Ok(rows), Ok(rule), Ok(distance_margin)) = (rows, rule, distance) else {
            return Err(problems);
        };
        Ok(SpecRequest {
            file: self.identify(rows, compared),
            rule,
            distance_margin,
            recorded: None,
        })
    }

    fn identify(&self, rows: Vec<SpecRow>, compared: &[Characteristic]) -> Option<Spec> {
        if let Some(src) = &self.source {
            let all_compared = src.rows.iter().all(|r| {
                compared
                    .iter()
                    .any(|(n, _)| match_key(n) == match_key(&r.characteristic))
            });
            let mut a: Vec<_> = src
                .rows
                .iter()
                .filter(|r| !is_blank_row(r))
                .map(content)
                .collect();
            let mut b: Vec<_> = rows.iter().map(content).collect();
            a.sort_by(|x, y| x.0.cmp(&y.0));
            b.sort_by(|x, y| x.0.cmp(&y.0));
            if all_compared && a == b && !src.rows.is_empty() {
                return Some(src.clone());
            }
        }
        if rows.is_empty() {
            return None;
        }
        Some(Spec {
            path: EDITED.into(),
            file_name: EDITED.into(),
            sha256: sha256_hex(to_csv(&rows).as_bytes()),
            rows,
        })
    }
}

/// What the view asks the window to do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    /// Nothing.
    None,
    /// Open a specification file.
    Load,
    /// Save the specification as CSV.
    Save,
    /// An edit is done: apply it (a new run when it checks).
    Apply,
}

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
    let mut edit = egui::TextEdit::singleline(text)
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
pub fn specification_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, cx: &Context) -> Action {
    let mut action = Action::None;
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
                action = Action::Load;
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
                action = Action::Save;
            }
            if ui
                .add_enabled(
                    ed.rows.iter().any(|r| !r.is_blank()),
                    egui::Button::new("Clear the table"),
                )
                .clicked()
            {
                ed.clear();
                action = Action::Apply;
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
    action
}

fn table_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, cx: &Context, action: &mut Action) {
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
                    *action = Action::Apply;
                }
            }
        });
}

fn not_compared_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, cx: &Context, action: &mut Action) {
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
        *action = Action::Apply;
    }
}

fn rule_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, action: &mut Action) {
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
            *action = Action::Apply;
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
            *action = Action::Apply;
        }
        if let Some(p) = p {
            ui.label(RichText::new(p).color(ui.visuals().error_fg_color));
        }
    });
    if ed.rule != before {
        *action = Action::Apply;
    }
}

fn distance_ui(ui: &mut egui::Ui, ed: &mut SpecEditor, action: &mut Action) {
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
            *action = Action::Apply;
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

#[cfg(test)]
mod tests {
    use super::*;

    fn compared() -> Vec<Characteristic> {
        vec![
            ("hub length".into(), Some("mm".into())),
            ("mass".into(), Some("g".into())),
        ]
    }

    fn spec_file() -> Spec {
        let row = |k: usize, name: &str, unit: &str, v: [f64; 3], m: f64| SpecRow {
            characteristic: name.into(),
            unit: Some(unit.into()),
            lower: Some(v[0]),
            target: Some(v[1]),
            upper: Some(v[2]),
            margin: Some([-m, m]),
            row: k + 2,
        };
        Spec {
            path: "/plans/hub-spec.csv".into(),
            file_name: "hub-spec.csv".into(),
            sha256: "ab".repeat(32),
            rows: vec![
                row(0, "hub length", "mm", [27.9, 28.0, 28.1], 0.03),
                row(1, "mass", "g", [140.5, 142.0, 143.5], 0.45),
            ],
        }
    }

    #[test]
    fn numbers_parse_with_a_point_or_a_comma() {
        assert_eq!(parse_number(" 12.018 "), Ok(Some(12.018)));
        assert_eq!(parse_number("12,5"), Ok(Some(12.5)));
        assert_eq!(parse_number(""), Ok(None));
        assert!(parse_number("1,2,3").is_err());
        assert!(parse_number("inf").is_err());
        assert!(parse_number("abc").is_err());
        for v in [12.018, 0.1 + 0.2, 1e-7, 1.0 / 3.0] {
            assert_eq!(parse_number(&cell_text(Some(v))), Ok(Some(v)));
        }
    }

    #[test]
    fn each_bad_cell_is_named() {
        let mut r = EditRow::blank("mass", None);
        r.lower = "143".into();
        r.upper = "142".into();
        r.target = "150".into();
        r.margin = "-1".into();
        let p = r.check().unwrap_err();
        let cells: Vec<Cell> = p.iter().map(|(c, _)| *c).collect();
        assert!(cells.contains(&Cell::Upper) && cells.contains(&Cell::Target));
        assert!(cells.contains(&Cell::Margin));
        let mut r = EditRow::blank("mass", None);
        r.asymmetric = true;
        r.below = "0.2".into();
        assert_eq!(r.check().unwrap_err()[0].0, Cell::Above);
        r.above = "0.3".into();
        assert_eq!(r.check().unwrap().margin, Some([-0.2, 0.3]));
        r.set_asymmetric(false);
        assert_eq!(r.margin, "0.2", "the smaller side");
    }

    #[test]
    fn an_unedited_file_is_applied_as_the_file_and_an_edit_is_named_by_its_csv() {
        let mut ed = SpecEditor::default();
        ed.ensure(&compared());
        ed.load(spec_file());
        let req = ed.request(&compared()).unwrap();
        assert_eq!(req.file.as_ref(), Some(&spec_file()));
        // An edit: the file name and SHA-256 of the cells' CSV form.
        ed.rows[0].upper = "28.2".into();
        let req = ed.request(&compared()).unwrap();
        let f = req.file.unwrap();
        assert_eq!(f.file_name, EDITED);
        assert_eq!(f.sha256, sha256_hex(to_csv(&f.rows).as_bytes()));
        assert_eq!(f.rows[0].upper, Some(28.2));
        // Typing the old value back gives the file again.
        ed.rows[0].upper = "28.1".into();
        assert_eq!(ed.request(&compared()).unwrap().file, Some(spec_file()));
        // A characteristic the file specifies is no longer compared: the file is not what is
        // applied any more.
        let fewer = &compared()[..1];
        let f = ed.request(fewer).unwrap().file.unwrap();
        assert_eq!(f.file_name, EDITED);
        assert_eq!(f.rows.len(), 1);
    }

    #[test]
    fn problems_block_the_request() {
        let mut ed = SpecEditor::default();
        ed.ensure(&compared());
        assert_eq!(ed.request(&compared()).unwrap(), SpecRequest::default());
        ed.rows[1].lower = "abc".into();
        let e = ed.request(&compared()).unwrap_err();
        assert_eq!(
            e,
            vec!["mass, lower limit: \"abc\" is not a number".to_string()]
        );
        ed.rows[1].lower.clear();
        ed.rule = RuleChoice::ToleranceFraction;
        assert!(ed.request(&compared()).is_err(), "no factor typed");
        ed.fraction = "0.1".into();
        assert_eq!(
            ed.request(&compared()).unwrap().rule,
            MarginRule::ToleranceFraction(0.1)
        );
        ed.distance = "0".into();
        assert!(ed.request(&compared()).is_err());
    }
}
