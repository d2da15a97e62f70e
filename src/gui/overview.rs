//! The verdict view: the result in plain words (with a specification, the four-way outcome
//! first), whether the shift matters against the margins, the test table, what was compared,
//! and the caution.

use egui::RichText;

use crate::analysis::decision::{Decision, Outcome};
use crate::analysis::{format_confidence, format_p, format_sig};
use crate::report::{box_m_line, mardia_line, permutation_line, unequal_line};

use super::action::Action;
use super::shown::Shown;
use super::state::View;
use super::theme::{lot_colors, lot_filled};
use super::widgets::swatch;
use super::words::{EDITED, MARGIN_CAUTION, margin_words, observed_words, test_line, unit_suffix};

/// The colour an outcome is written in.
fn outcome_color(ui: &egui::Ui, o: Outcome) -> egui::Color32 {
    match o {
        Outcome::DifferBeyondMargins => ui.visuals().error_fg_color,
        Outcome::Inconclusive => ui.visuals().warn_fg_color,
        Outcome::DifferWithinMargins | Outcome::Equivalent => ui.visuals().strong_text_color(),
    }
}

/// The characteristic a warning says looks like a whole-number code (cavity, nest), if it
/// is such a warning.
pub fn code_column(warning: &str) -> Option<&str> {
    let rest = warning.strip_prefix('"')?;
    let (name, tail) = rest.split_once('"')?;
    tail.starts_with(" holds only the whole numbers")
        .then_some(name)
}

/// Draws the verdict view; the link to the specification view asks for that tab.
pub fn overview_ui(ui: &mut egui::Ui, s: &mut Shown, actions: &mut Vec<Action>) {
    egui::ScrollArea::vertical().show(ui, |ui| {
        let c = &s.comparison;
        let h = &c.hotelling;
        let outcome = c.decision.as_ref().and_then(|d| d.outcome);
        if let Some(o) = outcome {
            ui.label(
                RichText::new(o.words())
                    .heading()
                    .size(26.0)
                    .strong()
                    .color(outcome_color(ui, o)),
            );
        }
        let color = if h.differ {
            ui.visuals().warn_fg_color
        } else {
            ui.visuals().text_color()
        };
        let test = RichText::new(if h.differ {
            format!("The lots differ (alpha {})", c.alpha())
        } else {
            format!("No difference detected (alpha {})", c.alpha())
        })
        .color(color);
        ui.label(if outcome.is_some() {
            test.size(17.0)
        } else {
            test.heading()
        });
        ui.label(&c.verdict);
        ui.add_space(8.0);
        for w in &c.warnings {
            ui.label(RichText::new(format!("Warning: {w}")).color(ui.visuals().warn_fg_color));
            if let Some(name) = code_column(w)
                && ui
                    .button(format!("read {name} as a label"))
                    .on_hover_text(format!(
                        "Untick \"{name}\" from the compared characteristics and compare \
                         again; tick it in the side panel to compare it again"
                    ))
                    .clicked()
            {
                actions.push(Action::SetCompared {
                    key: crate::data::match_key(name),
                    compared: false,
                });
                actions.push(Action::Rerun);
            }
        }
        decision_ui(ui, s, actions);
        ui.add_space(8.0);
        ui.strong("Hotelling's two-sample T² test");
        egui::Grid::new("test")
            .striped(true)
            .num_columns(2)
            .show(ui, |ui| {
                let rows = [
                    ("T²", format_sig(h.t2, 6)),
                    (
                        "F",
                        format!(
                            "{} on ({}, {}) degrees of freedom",
                            format_sig(h.f, 6),
                            h.df1,
                            h.df2
                        ),
                    ),
                    ("p-value", format_p(h.p_value)),
                    (
                        "critical T² at alpha",
                        format!(
                            "{} (critical F {})",
                            format_sig(h.critical_t2, 6),
                            format_sig(h.critical_f, 6)
                        ),
                    ),
                    (
                        "Mahalanobis D² between means",
                        format_sig(h.mahalanobis_d2, 6),
                    ),
                    (
                        "units compared",
                        format!(
                            "{} (reference) and {} (candidate)",
                            c.lots[0].n, c.lots[1].n
                        ),
                    ),
                ];
                for (k, v) in rows {
                    ui.label(k);
                    ui.label(v);
                    ui.end_row();
                }
                let d = &c.discriminant;
                if let Some(rate) = d.leave_one_out_rate {
                    ui.label("misclassified, each unit held out");
                    ui.label(format!("{:.1}% (by the discriminant rule)", 100.0 * rate));
                    ui.end_row();
                }
                ui.label("condition of the pooled covariance");
                ui.label(format_sig(c.condition_number, 3));
                ui.end_row();
                if let Some(d) = &c.detectable {
                    ui.label(format!("shift detected with {:.0}% power", 100.0 * d.power));
                    ui.label(format!(
                        "Mahalanobis distance {} (hover: along the observed direction, per \
                         characteristic)",
                        format_sig(d.distance, 3)
                    ))
                    .on_hover_text(format!(
                        "The shift these lot sizes detect 8 times in 10 at this alpha; read \
                         \"no difference detected\" against it. Along the observed direction: \
                         {}",
                        d.along_words(&c.characteristics)
                    ));
                    ui.end_row();
                }
            });
        ui.add_space(8.0);
        ui.strong("What drives the shift");
        egui::Grid::new("drivers")
            .striped(true)
            .num_columns(3)
            .show(ui, |ui| {
                ui.label("characteristic");
                ui.label("T² lost without it");
                ui.label("weight / SD");
                ui.end_row();
                for r in &c.ranking {
                    ui.label(&r.characteristic);
                    ui.label(format_sig(r.t2_drop, 4));
                    ui.label(format_sig(r.standardized_coefficient, 3));
                    ui.end_row();
                }
            });
        ui.add_space(8.0);
        checks_ui(ui, s, actions);
        ui.add_space(8.0);
        in_database_ui(ui, s);
        ui.strong("Lots");
        for (i, lot) in s.lots.iter().enumerate().filter(|_| !s.in_database()) {
            let p = &lot.provenance;
            let pl = &s.prepared.lots[i];
            ui.label(format!(
                "{}: \"{}\" from {} ({} bytes, SHA-256 {}…), {} rows read, {} units used",
                if i == 0 { "reference" } else { "candidate" },
                lot.name,
                p.file_name,
                p.size_bytes,
                &p.sha256[..12.min(p.sha256.len())],
                pl.n_read,
                pl.kept.len()
            ));
        }
        if let Some(counted) = &s.counted {
            for (i, lot) in counted.iter().enumerate() {
                let p = &s.lots[i].provenance;
                let column = p.split.as_ref().map_or("", |(c, _)| c.as_str());
                ui.label(format!(
                    "{}: {column} = \"{}\" in {}, {} rows read, {} units used (counted inside \
                     the database)",
                    if i == 0 { "reference" } else { "candidate" },
                    lot.value,
                    p.file_name,
                    lot.rows_read,
                    lot.n
                ));
            }
        }
        for p in &s.prepared.pairings {
            ui.label(format!(
                "compared as one characteristic: the reference's \"{}\" and the \
                 candidate's \"{}\"",
                p.reference, p.candidate
            ));
        }
        for e in &s.prepared.exclusions {
            ui.horizontal(|ui| {
                ui.label(format!(
                    "set aside: {} lot, row {}{} — {}",
                    if e.lot == 0 { "reference" } else { "candidate" },
                    e.row,
                    crate::data::label_text(&e.labels)
                        .map(|l| format!(" ({l})"))
                        .unwrap_or_default(),
                    e.reason
                ));
                if ui
                    .small_button("put back")
                    .on_hover_text("Compare again with this unit")
                    .clicked()
                {
                    actions.push(Action::RestoreUnit {
                        lot: e.lot,
                        row: e.row,
                    });
                }
            });
        }
        for u in &s.prepared.unmatched {
            ui.label(format!(
                "not compared: \"{}\" in the {} lot ({})",
                u.column,
                if u.lot == 0 { "reference" } else { "candidate" },
                u.why
            ));
        }
        ui.add_space(8.0);
        ui.label(RichText::new(test_line(s)).monospace());
    });
}

/// For a comparison computed inside a database: what needs every unit and was not computed,
/// and the units beyond the outlier cutoff with their labels.
fn in_database_ui(ui: &mut egui::Ui, s: &Shown) {
    let Some(db) = &s.comparison.in_database else {
        return;
    };
    ui.strong("Computed inside the database");
    ui.label(
        "Only the lots' summaries left the database (counts, means, sums of squares and \
         cross-products, and the units beyond the outlier cutoff).",
    );
    if !db.not_computed.is_empty() {
        ui.label(format!(
            "Not computed inside the database: {}.",
            db.not_computed.join("; ")
        ));
    }
    let count = |g: usize| db.outliers.iter().filter(|u| u.lot == g).count();
    ui.label(format!(
        "Outliers found inside the database: {} in the reference lot, {} in the candidate \
         lot{}.",
        count(0),
        count(1),
        if db.outliers_truncated {
            " (the list was cut at its limit)"
        } else {
            ""
        }
    ));
    for u in db.outliers.iter().take(20) {
        let labels: Vec<String> = u.labels.iter().map(|(h, v)| format!("{h} {v}")).collect();
        ui.label(format!(
            "  {} lot: {} — d² = {}, {}",
            if u.lot == 0 { "reference" } else { "candidate" },
            labels.join(", "),
            format_sig(u.d2, 4),
            crate::format::p_text(u.p_value)
        ));
    }
    if db.outliers.len() > 20 {
        ui.label(format!(
            "  … and {} more (all are in the exported record)",
            db.outliers.len() - 20
        ));
    }
    ui.add_space(8.0);
}

/// Whether the shift matters: the margins, equivalence per characteristic and at once, the
/// fraction inside every limit; or, without margins, how to give them.
fn decision_ui(ui: &mut egui::Ui, s: &Shown, actions: &mut Vec<Action>) {
    let c = &s.comparison;
    let decision = c.decision.as_ref();
    if decision.and_then(|d| d.outcome).is_none() {
        ui.horizontal_wrapped(|ui| {
            ui.spacing_mut().item_spacing.x = 4.0;
            ui.label("Equivalence is not assessed: it needs margins. Type them, load a specification file or choose a margin rule in the");
            if ui.link("Specification tab").clicked() {
                actions.push(Action::ShowView(View::Specification));
            }
        });
        if let Some(d) = decision {
            in_spec_ui(ui, s, d);
        }
        return;
    }
    let Some(d) = decision else { return };
    ui.add_space(4.0);
    ui.strong("Does the shift matter? Equivalence within the margins");
    let spec = &d.specification;
    let source = match (&spec.file, &spec.sha256) {
        (Some(f), _) if f == EDITED => "edited in the window, not saved".to_string(),
        (Some(f), Some(h)) => format!("{f} (SHA-256 {}…)", &h[..12.min(h.len())]),
        (Some(f), None) => f.clone(),
        _ => "no file".into(),
    };
    ui.label(format!(
        "Specification: {source}; {}.",
        spec.rule.describe()
    ));
    if let Some(eq) = &d.equivalence {
        if !eq.per_characteristic.is_empty() {
            let conf = format_confidence(2.0 * eq.alpha);
            egui::Grid::new("equivalence")
                .striped(true)
                .num_columns(5)
                .show(ui, |ui| {
                    for t in [
                        "characteristic",
                        "margin (candidate − reference)",
                        "difference (candidate − reference)",
                        &format!("{conf}% interval"),
                        "result",
                    ] {
                        ui.strong(t);
                    }
                    ui.end_row();
                    for r in &eq.per_characteristic {
                        let unit = unit_suffix(c, &r.characteristic);
                        ui.label(&r.characteristic);
                        ui.label(format!("{}{unit}", margin_words(r.margin)));
                        ui.label(format!("{}{unit}", format_sig(r.difference, 4)));
                        ui.label(format!(
                            "[{}, {}]",
                            format_sig(r.interval[0], 4),
                            format_sig(r.interval[1], 4)
                        ));
                        if r.equivalent {
                            ui.label(RichText::new("within the margin").strong());
                        } else if r.beyond {
                            ui.label(
                                RichText::new("wholly outside the margin")
                                    .strong()
                                    .color(ui.visuals().error_fg_color),
                            );
                        } else {
                            ui.label(
                                RichText::new("not shown within the margin")
                                    .color(ui.visuals().warn_fg_color),
                            );
                        }
                        ui.end_row();
                    }
                });
            ui.weak(format!(
                "Two one-sided tests at alpha {} each (Welch): equivalent when the {conf}% \
                 interval lies inside the margin. All must pass; no multiplicity adjustment is \
                 needed.",
                eq.alpha
            ));
        }
        if let Some(m) = &eq.multivariate {
            ui.label(format!(
                "All characteristics at once: the distance between the lot means is at most {} \
                 (upper {}% bound) against the margin ε = {}{} — {}.",
                format_sig(m.distance_upper_bound, 4),
                format_confidence(eq.alpha),
                format_sig(m.epsilon, 4),
                if m.epsilon_from_margins {
                    ", derived from the margins and these data (approximate level)"
                } else {
                    ""
                },
                if m.equivalent {
                    "equivalent"
                } else {
                    "equivalence not shown"
                }
            ));
        }
    }
    if d.outcome == Some(Outcome::Inconclusive) {
        ui.label(match d.units_needed {
            Some(n) => format!(
                "About {n} units per lot would give the equivalence tests {:.0}% power if the \
                 true difference were the one observed.",
                100.0 * crate::analysis::decision::PLAN_POWER
            ),
            None => "No lot size would show equivalence if the true difference were the one \
                     observed: it lies on or beyond a margin."
                .into(),
        });
    }
    in_spec_ui(ui, s, d);
    for n in &d.notes {
        ui.weak(format!("Note: {n}"));
    }
    ui.label(RichText::new(MARGIN_CAUTION).italics().small());
}

/// Each lot's expected share outside the limits, and the share of units observed inside them.
fn in_spec_ui(ui: &mut egui::Ui, s: &Shown, d: &Decision) {
    let Some(ins) = &d.in_spec else { return };
    let colors = lot_colors(ui);
    ui.label(format!(
        "Inside every specification limit at once ({}; normal model):",
        ins.characteristics.join(", ")
    ));
    for (g, l) in ins.lots.iter().enumerate() {
        ui.horizontal(|ui| {
            swatch(ui, colors[g], lot_filled(g));
            ui.label(format!(
                "{}: expected {} ppm outside{}",
                s.comparison.lots[g].name,
                format_sig(1e6 * (1.0 - l.expected).max(0.0), 3),
                l.observed.map_or(String::new(), |o| format!(
                    "; observed: {} inside",
                    observed_words(o)
                ))
            ));
        });
    }
}

fn checks_ui(ui: &mut egui::Ui, s: &mut Shown, actions: &mut Vec<Action>) {
    // The view's own text is edited here; the rest of the result is only read.
    let mut typed = std::mem::take(&mut s.set_aside_reason);
    checks_body(ui, s, &mut typed, actions);
    s.set_aside_reason = typed;
}

/// A grid cell's text wrapped to the width left in the panel (a long line would otherwise widen
/// the grid past the panel's edge).
fn wrapped(ui: &mut egui::Ui, text: String) -> egui::Response {
    ui.add(egui::Label::new(text).wrap())
}

fn checks_body(ui: &mut egui::Ui, s: &Shown, typed: &mut String, actions: &mut Vec<Action>) {
    let c = &s.comparison;
    ui.strong("Assumption checks and alternatives");
    if c.box_m.is_none() && c.mardia.is_empty() && c.permutation.is_none() {
        ui.label("The checks were not run (see Settings).");
        return;
    }
    ui.label(
        RichText::new(format!(
            "Favoured: {} ({}) — {}",
            c.favoured.test,
            crate::format::p_text(c.favoured.p_value),
            c.favoured.why
        ))
        .strong(),
    );
    egui::Grid::new("checks")
        .striped(true)
        .num_columns(2)
        .show(ui, |ui| {
            if let Some(b) = &c.box_m {
                ui.label("Box's M, equal covariance matrices");
                ui.label(box_m_line(b)).on_hover_text(&b.why);
                ui.end_row();
            }
            if let Some(u) = &c.unequal_covariance {
                ui.label("Test without equal covariances (Krishnamoorthy–Yu)");
                ui.label(unequal_line(u));
                ui.end_row();
            }
            if c.permutation.is_none()
                && c.settings.permutations == 0
                && s.requested_permutations > 0
            {
                ui.label("Permutation p-value");
                ui.label(format!(
                    "computing {} relabellings… (the rest of the result is final)",
                    s.requested_permutations
                ));
                ui.end_row();
            }
            if let Some(p) = &c.permutation {
                ui.label("Permutation p-value");
                wrapped(ui, permutation_line(p));
                ui.end_row();
            }
            for m in &c.mardia {
                ui.label(format!("Mardia, {}", m.lot));
                ui.label(mardia_line(m));
                ui.end_row();
            }
            if !c.normality.is_empty() {
                for g in 0..2 {
                    let low: Vec<String> = c
                        .normality
                        .iter()
                        .filter(|r| r.lots[g].is_some_and(|t| t.p_value < c.alpha()))
                        .map(|r| r.characteristic.clone())
                        .collect();
                    let computed = c.normality.iter().any(|r| r.lots[g].is_some());
                    let large: Vec<_> = c
                        .normality
                        .iter()
                        .filter_map(|r| r.large.get(g).and_then(Option::as_ref).map(|t| (r, t)))
                        .collect();
                    if !computed && !large.is_empty() {
                        let low: Vec<String> = large
                            .iter()
                            .filter(|(_, t)| t.anderson_darling_p < c.alpha() || t.k2_p < c.alpha())
                            .map(|(r, _)| r.characteristic.clone())
                            .collect();
                        let worst_skew = large
                            .iter()
                            .map(|(_, t)| t.skewness.abs())
                            .fold(0.0, f64::max);
                        let worst_kurt = large
                            .iter()
                            .map(|(_, t)| t.excess_kurtosis.abs())
                            .fold(0.0, f64::max);
                        ui.label(format!("Anderson–Darling and K², {}", c.lots[g].name));
                        wrapped(
                            ui,
                            format!(
                                "{}; largest |skewness| {}, largest |excess kurtosis| {} (the size \
                             of the departure, which decides at this many units)",
                                if low.is_empty() {
                                    format!("no characteristic below p = {}", c.alpha())
                                } else {
                                    format!("below p = {}: {}", c.alpha(), low.join(", "))
                                },
                                format_sig(worst_skew, 2),
                                format_sig(worst_kurt, 2)
                            ),
                        );
                        ui.end_row();
                        continue;
                    }
                    ui.label(format!("Shapiro–Wilk, {}", c.lots[g].name));
                    ui.label(if !computed {
                        format!(
                            "not computed: {} units (the test is computed for 3 to {})",
                            c.lots[g].n,
                            crate::stats::normality::MAX_UNITS
                        )
                    } else if low.is_empty() {
                        format!("no characteristic below p = {}", c.alpha())
                    } else {
                        format!("below p = {}: {}", c.alpha(), low.join(", "))
                    });
                    ui.end_row();
                }
            }
        });
    if let Some(o) = &s.record.outliers {
        let count = |g: usize| o.units.iter().filter(|u| u.lot == g).count();
        ui.label(format!(
            "Outliers (squared Mahalanobis distance from the unit's own lot mean beyond the Beta \
             cutoff at alpha/n): {} in the reference lot, {} in the candidate lot.",
            count(0),
            count(1)
        ));
        if let Some(w) = &c.without_outliers {
            let text = format!(
                "Without the {} flagged units: T² = {}, {}: {}",
                w.removed[0] + w.removed[1],
                format_sig(w.t2, 6),
                crate::format::p_text(w.p_value),
                if w.same_decision {
                    "the decision holds without them."
                } else {
                    "the decision changes without them — look at these units before deciding."
                }
            );
            ui.label(if w.same_decision {
                RichText::new(text)
            } else {
                RichText::new(text)
                    .strong()
                    .color(ui.visuals().warn_fg_color)
            });
        }
        ui.horizontal(|ui| {
            ui.label("Reason for setting a unit aside:");
            ui.add(
                egui::TextEdit::singleline(typed)
                    .hint_text("e.g. gauge fault, confirmed by a remeasurement")
                    .desired_width(320.0),
            );
        });
        let reason = typed.trim().to_string();
        for u in o.units.iter().take(20) {
            let labels: Vec<String> = u.labels.iter().map(|(h, v)| format!("{h} {v}")).collect();
            ui.horizontal(|ui| {
                ui.label(format!(
                    "  {} lot, row {}: {} — d² = {}, {}",
                    if u.lot == 0 { "reference" } else { "candidate" },
                    u.row.map_or("?".into(), |r| r.to_string()),
                    labels.join(", "),
                    format_sig(u.d2, 4),
                    crate::format::p_text(u.p_value)
                ));
                if let Some(row) = u.row {
                    let button = ui
                        .add_enabled(!reason.is_empty(), egui::Button::new("set aside"))
                        .on_hover_text(
                            "Compare again without this unit; the reason is recorded with it \
                             (the lot file is not changed)",
                        )
                        .on_disabled_hover_text("Type the reason first: it is recorded");
                    if button.clicked() {
                        actions.push(Action::SetUnitAside {
                            lot: u.lot,
                            row,
                            labels: u.labels.clone(),
                            reason: reason.clone(),
                        });
                    }
                }
            });
        }
        if o.units.len() > 20 {
            ui.label(format!(
                "  … and {} more (all are in the exported record)",
                o.units.len() - 20
            ));
        }
    }
}
