//! The verdict view: the result in plain words, the test table, what was compared, and the
//! caution.

use egui::RichText;

use crate::analysis::{format_p, format_sig};
use crate::report::CAUTION;

use super::app::test_line;
use super::shown::Shown;

/// Draws the verdict view.
pub fn overview_ui(ui: &mut egui::Ui, s: &mut Shown) {
    egui::ScrollArea::vertical().show(ui, |ui| {
        let c = &s.comparison;
        let h = &c.hotelling;
        let color = if h.differ {
            ui.visuals().warn_fg_color
        } else {
            ui.visuals().text_color()
        };
        ui.label(
            RichText::new(if h.differ {
                format!("The lots differ (alpha {})", c.alpha)
            } else {
                format!("No difference detected (alpha {})", c.alpha)
            })
            .heading()
            .color(color),
        );
        ui.label(&c.verdict);
        ui.add_space(8.0);
        for w in &c.warnings {
            ui.label(RichText::new(format!("Warning: {w}")).color(ui.visuals().warn_fg_color));
        }
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
            });
        ui.add_space(8.0);
        ui.strong("What drives the shift");
        egui::Grid::new("drivers")
            .striped(true)
            .num_columns(3)
            .show(ui, |ui| {
                ui.label("characteristic");
                ui.label("T² lost without it");
                ui.label("standardized coefficient");
                ui.end_row();
                for r in &c.ranking {
                    ui.label(&r.characteristic);
                    ui.label(format_sig(r.t2_drop, 4));
                    ui.label(format_sig(r.standardized_coefficient, 3));
                    ui.end_row();
                }
            });
        ui.add_space(8.0);
        ui.strong("Assumption checks");
        ui.label(
            "This version computes the T² test under its textbook assumptions (multivariate \
             normal lots with equal covariance matrices) and does not yet test them: Box's M, \
             Mardia's tests, outlier screening, the unequal-covariance test and the permutation \
             p-value are planned. Until then, look at the pair plots for outliers and for very \
             different spreads.",
        );
        ui.add_space(8.0);
        ui.strong("Lots");
        for (i, lot) in s.lots.iter().enumerate() {
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
                pl.data.nrows()
            ));
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
        ui.add_space(8.0);
        ui.label(RichText::new(CAUTION).italics());
    });
}
