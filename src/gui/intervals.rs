//! The interval chart: each characteristic's mean difference with its simultaneous,
//! Bonferroni and one-at-a-time intervals against the zero line. Characteristics have
//! different units, so the chart is drawn in pooled standard deviations; the table below
//! gives the intervals in each characteristic's own unit.
//!
//! With margins, a second chart beside it shows the other question, in the other direction:
//! candidate − reference with its `1 − 2 alpha` equivalence interval against each margin.

use egui::{Color32, RichText};
use egui_plot::{Line, MarkerShape, Plot, Points, Polygon, VLine};

use crate::analysis::decision::{Equivalence, EquivalenceRow};
use crate::analysis::{format_confidence, format_p, format_sig};

use super::shown::Shown;
use super::widgets::{row_names, swatch};
use super::words::{margin_words, unit_suffix};

/// Colours of the margin chart for the window's theme: the margin band, and an equivalence
/// interval inside its margin, not shown inside, wholly outside.
fn margin_colors(ui: &egui::Ui) -> [Color32; 4] {
    if ui.visuals().dark_mode {
        [
            Color32::from_rgb(120, 140, 175),
            Color32::from_rgb(80, 200, 130),
            Color32::from_rgb(200, 200, 200),
            Color32::from_rgb(240, 95, 95),
        ]
    } else {
        [
            Color32::from_rgb(95, 115, 155),
            Color32::from_rgb(20, 115, 70),
            Color32::from_rgb(90, 90, 90),
            Color32::from_rgb(185, 45, 45),
        ]
    }
}

/// How an equivalence row came out: its word in the chart, its words in the legend and the
/// table, its colour (index into [`margin_colors`]) and marker.
fn status(r: &EquivalenceRow) -> (&'static str, &'static str, usize, MarkerShape) {
    if r.equivalent {
        ("within", "within the margin", 1, MarkerShape::Square)
    } else if r.beyond {
        (
            "outside",
            "wholly outside the margin",
            3,
            MarkerShape::Cross,
        )
    } else {
        (
            "not shown",
            "not shown within the margin",
            2,
            MarkerShape::Circle,
        )
    }
}

const SIM: Color32 = Color32::from_rgb(150, 150, 205);
const BONF: Color32 = Color32::from_rgb(80, 90, 170);
const ONE: Color32 = Color32::from_rgb(20, 30, 90);
const POINT: Color32 = Color32::from_rgb(200, 60, 60);

/// Draws the interval view.
pub fn intervals_ui(ui: &mut egui::Ui, s: &mut Shown) {
    let c = &s.comparison;
    let equivalence = c
        .decision
        .as_ref()
        .and_then(|d| d.equivalence.as_ref())
        .filter(|e| !e.per_characteristic.is_empty());
    let p = c.characteristics.len();
    let height = (70.0 + 42.0 * p as f32).clamp(220.0, ui.available_height() * 0.6);
    match equivalence {
        None => {
            difference_chart(ui, s, height);
            ui.weak(
                "No margins: the chart of the candidate − reference difference against the \
                 margins appears when the Specification tab gives them.",
            );
        }
        Some(eq) if ui.available_width() >= 1000.0 => {
            ui.columns(2, |cols| {
                difference_chart(&mut cols[0], s, height);
                margin_chart(&mut cols[1], s, eq, height);
            });
        }
        Some(eq) => {
            // A narrow window: the two charts one under the other, everything scrolled.
            egui::ScrollArea::vertical().show(ui, |ui| {
                difference_chart(ui, s, height);
                margin_chart(ui, s, eq, height);
                ui.add_space(6.0);
                egui::ScrollArea::horizontal().show(ui, |ui| tables(ui, s, Some(eq)));
            });
            return;
        }
    }
    ui.add_space(6.0);
    egui::ScrollArea::both().show(ui, |ui| tables(ui, s, equivalence));
}

fn tables(ui: &mut egui::Ui, s: &Shown, equivalence: Option<&Equivalence>) {
    interval_table(ui, s);
    if let Some(eq) = equivalence {
        ui.add_space(8.0);
        equivalence_table(ui, s, eq);
    }
}

fn difference_chart(ui: &mut egui::Ui, s: &Shown, height: f32) {
    let c = &s.comparison;
    let conf = format_confidence(c.alpha());
    ui.label(RichText::new("Is there a difference? Candidate − reference").strong());
    ui.label(format!(
        "Mean difference (candidate minus reference) with {conf}% intervals, in pooled standard \
         deviations: right of zero, the candidate is higher. A larger diamond marks a \
         simultaneous interval that misses the zero line."
    ));
    let names: Vec<String> = c.characteristics.clone();
    let names_hover = names.clone();
    ui.horizontal_wrapped(|ui| {
        for (color, name) in [
            (SIM, "simultaneous (T²)"),
            (BONF, "Bonferroni"),
            (ONE, "one at a time"),
            (POINT, "difference"),
        ] {
            swatch(ui, color, true);
            ui.label(name);
            ui.add_space(10.0);
        }
    });
    Plot::new("intervals")
        .height(height)
        .show_grid([true, false])
        .allow_scroll(false)
        .y_axis_formatter(row_names(names.clone()))
        .y_axis_min_width(120.0)
        .x_axis_label("candidate − reference / pooled standard deviation")
        .label_formatter(move |h| {
            let pos = match h {
                egui_plot::HoverPosition::NearDataPoint { position, .. }
                | egui_plot::HoverPosition::Elsewhere { position } => *position,
            };
            let k = (-pos.y).round();
            (k >= 0.0 && (k as usize) < names_hover.len())
                .then(|| format!("{}\n{:.3} SD", names_hover[k as usize], pos.x))
        })
        .show(ui, |plot| {
            plot.vline(VLine::new("zero", 0.0).color(Color32::GRAY));
            for (k, iv) in c.intervals.iter().enumerate() {
                let sd = c.per_characteristic[k].pooled_sd;
                let y = -(k as f64);
                let seg = |r: [f64; 2], dy: f64| vec![[r[0] / sd, y + dy], [r[1] / sd, y + dy]];
                plot.line(
                    Line::new("simultaneous (T²)", seg(iv.simultaneous, 0.18))
                        .color(SIM)
                        .width(5.0),
                );
                plot.line(
                    Line::new("Bonferroni", seg(iv.bonferroni, 0.0))
                        .color(BONF)
                        .width(3.0),
                );
                plot.line(
                    Line::new("one at a time", seg(iv.one_at_a_time, -0.18))
                        .color(ONE)
                        .width(1.5),
                );
                let shape = if iv.excludes_zero[0] {
                    egui_plot::MarkerShape::Diamond
                } else {
                    egui_plot::MarkerShape::Circle
                };
                plot.points(
                    Points::new("difference", vec![[iv.difference / sd, y]])
                        .shape(shape)
                        .radius(if iv.excludes_zero[0] { 6.0 } else { 4.0 })
                        .color(POINT),
                );
            }
        });
}

/// Candidate − reference with its equivalence interval against each margin, in pooled SDs.
fn margin_chart(ui: &mut egui::Ui, s: &Shown, eq: &Equivalence, height: f32) {
    let c = &s.comparison;
    let conf = format_confidence(2.0 * eq.alpha);
    ui.label(RichText::new("Does it matter? Candidate − reference against the margins").strong());
    ui.label(format!(
        "Mean difference (candidate minus reference) with its {conf}% interval (Welch) against \
         the margin (shaded), in pooled standard deviations. Inside the margin: equivalent."
    ));
    let rows: Vec<Option<&EquivalenceRow>> = c
        .characteristics
        .iter()
        .map(|n| {
            eq.per_characteristic
                .iter()
                .find(|r| &r.characteristic == n)
        })
        .collect();
    let names: Vec<String> = c
        .characteristics
        .iter()
        .zip(&rows)
        .map(|(n, r)| match r {
            Some(r) => format!("{n}: {}", status(r).0),
            None => format!("{n}: no margin"),
        })
        .collect();
    let names_hover = c.characteristics.clone();
    let colors = margin_colors(ui);
    ui.horizontal_wrapped(|ui| {
        for (k, name) in ["margin", "within", "not shown within", "wholly outside"]
            .into_iter()
            .enumerate()
        {
            swatch(ui, colors[k], true);
            ui.label(name);
            ui.add_space(10.0);
        }
    });
    let band = colors[0];
    let band_fill = Color32::from_rgba_unmultiplied(band.r(), band.g(), band.b(), 50);
    Plot::new("margins")
        .height(height)
        .show_grid([true, false])
        .allow_scroll(false)
        .y_axis_formatter(row_names(names))
        .y_axis_min_width(150.0)
        .x_axis_label("candidate − reference / pooled standard deviation")
        .label_formatter(move |h| {
            let pos = match h {
                egui_plot::HoverPosition::NearDataPoint { position, .. }
                | egui_plot::HoverPosition::Elsewhere { position } => *position,
            };
            let k = (-pos.y).round();
            (k >= 0.0 && (k as usize) < names_hover.len())
                .then(|| format!("{}\n{:.3} SD", names_hover[k as usize], pos.x))
        })
        .show(ui, |plot| {
            plot.vline(VLine::new("zero", 0.0).color(Color32::GRAY));
            for (k, r) in rows.iter().enumerate() {
                let Some(r) = r else { continue };
                let sd = c.per_characteristic[k].pooled_sd;
                let y = -(k as f64);
                let [lo, hi] = [r.margin[0] / sd, r.margin[1] / sd];
                plot.polygon(
                    Polygon::new(
                        "margin",
                        vec![[lo, y - 0.3], [hi, y - 0.3], [hi, y + 0.3], [lo, y + 0.3]],
                    )
                    .fill_color(band_fill)
                    .stroke(egui::Stroke::new(1.0, band)),
                );
                let (_, name, color, shape) = status(r);
                let color = colors[color];
                plot.line(
                    Line::new(name, vec![[r.interval[0] / sd, y], [r.interval[1] / sd, y]])
                        .color(color)
                        .width(3.0),
                );
                plot.points(
                    Points::new(name, vec![[r.difference / sd, y]])
                        .shape(shape)
                        .filled(true)
                        .radius(5.0)
                        .color(color),
                );
            }
        });
}

fn equivalence_table(ui: &mut egui::Ui, s: &Shown, eq: &Equivalence) {
    let c = &s.comparison;
    let colors = margin_colors(ui);
    let conf = format_confidence(2.0 * eq.alpha);
    ui.strong(format!(
        "Equivalence, candidate − reference (two one-sided tests at alpha {}; {conf}% Welch \
         interval)",
        eq.alpha
    ));
    egui::Grid::new("equivalence-table")
        .striped(true)
        .num_columns(7)
        .show(ui, |ui| {
            for h in [
                "characteristic",
                "margin",
                "difference",
                &format!("{conf}% interval"),
                "p (Welch)",
                "p (pooled)",
                "result",
            ] {
                ui.strong(h);
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
                ui.label(format_p(r.welch_p));
                ui.label(format_p(r.pooled_p));
                let (_, words, color, _) = status(r);
                ui.label(RichText::new(words).color(colors[color]));
                ui.end_row();
            }
        });
}

fn interval_table(ui: &mut egui::Ui, s: &Shown) {
    let c = &s.comparison;
    egui::Grid::new("interval-table")
        .striped(true)
        .num_columns(5)
        .show(ui, |ui| {
            for h in [
                "characteristic",
                "cand − ref",
                "simultaneous (T²)",
                "Bonferroni",
                "one at a time",
            ] {
                ui.strong(h);
            }
            ui.end_row();
            for iv in &c.intervals {
                let unit = unit_suffix(c, &iv.characteristic);
                ui.label(&iv.characteristic);
                ui.label(format!("{}{unit}", format_sig(iv.difference, 4)));
                for (r, flag) in [
                    (iv.simultaneous, iv.excludes_zero[0]),
                    (iv.bonferroni, iv.excludes_zero[1]),
                    (iv.one_at_a_time, iv.excludes_zero[2]),
                ] {
                    let text = format!("[{}, {}]{unit}", format_sig(r[0], 4), format_sig(r[1], 4));
                    if flag {
                        ui.label(RichText::new(format!("{text} excludes 0")).strong());
                    } else {
                        ui.label(text);
                    }
                }
                ui.end_row();
            }
        });
    let conf = format_confidence(c.alpha());
    for (iv, r) in c.intervals.iter().zip(&c.per_characteristic) {
        ui.label(crate::format::shift_sentence(
            &iv.characteristic,
            r.unit.as_deref(),
            iv.difference,
            iv.simultaneous,
            crate::stats::moments::finer_decimals(r.lots[0].decimals, r.lots[1].decimals),
            &conf,
        ));
    }
}
