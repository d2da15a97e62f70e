//! The interval chart: each characteristic's mean difference with its simultaneous,
//! Bonferroni and one-at-a-time intervals against the zero line. Characteristics have
//! different units, so the chart is drawn in pooled standard deviations; the table below
//! gives the intervals in each characteristic's own unit.

use egui::{Color32, RichText};
use egui_plot::{Line, Plot, Points, VLine};

use crate::analysis::{format_confidence, format_sig};

use super::shown::Shown;

const SIM: Color32 = Color32::from_rgb(150, 150, 205);
const BONF: Color32 = Color32::from_rgb(80, 90, 170);
const ONE: Color32 = Color32::from_rgb(20, 30, 90);
const POINT: Color32 = Color32::from_rgb(200, 60, 60);

/// A y-axis formatter naming the characteristic drawn at y = −k (row k from the top).
pub fn row_names(
    names: Vec<String>,
) -> impl Fn(egui_plot::GridMark, &std::ops::RangeInclusive<f64>) -> String {
    move |mark, _| {
        let k = -mark.value;
        if (k - k.round()).abs() < 1e-9 && k >= 0.0 && (k as usize) < names.len() {
            names[k as usize].clone()
        } else {
            String::new()
        }
    }
}

/// Draws the interval view.
pub fn intervals_ui(ui: &mut egui::Ui, s: &mut Shown) {
    let c = &s.comparison;
    let conf = format_confidence(c.alpha);
    ui.label(format!(
        "Mean difference (reference minus candidate) with {conf}% intervals, in pooled standard \
         deviations. A larger diamond marks a simultaneous interval that misses the zero line."
    ));
    let names: Vec<String> = c.characteristics.clone();
    let p = names.len();
    let height = (70.0 + 42.0 * p as f32).clamp(220.0, ui.available_height() * 0.6);
    let names_hover = names.clone();
    ui.horizontal(|ui| {
        for (color, name) in [
            (SIM, "simultaneous (T²)"),
            (BONF, "Bonferroni"),
            (ONE, "one at a time"),
            (POINT, "difference"),
        ] {
            super::app::swatch(ui, color, true);
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
        .x_axis_label("difference / pooled standard deviation")
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
    ui.add_space(6.0);
    egui::ScrollArea::both().show(ui, |ui| {
        egui::Grid::new("interval-table")
            .striped(true)
            .num_columns(5)
            .show(ui, |ui| {
                for h in [
                    "characteristic",
                    "difference",
                    "simultaneous (T²)",
                    "Bonferroni",
                    "one at a time",
                ] {
                    ui.strong(h);
                }
                ui.end_row();
                for (k, iv) in c.intervals.iter().enumerate() {
                    let unit = c
                        .units
                        .get(k)
                        .cloned()
                        .flatten()
                        .map(|u| format!(" {u}"))
                        .unwrap_or_default();
                    ui.label(&iv.characteristic);
                    ui.label(format!("{}{unit}", format_sig(iv.difference, 4)));
                    for (r, flag) in [
                        (iv.simultaneous, iv.excludes_zero[0]),
                        (iv.bonferroni, iv.excludes_zero[1]),
                        (iv.one_at_a_time, iv.excludes_zero[2]),
                    ] {
                        let text = format!("[{}, {}]", format_sig(r[0], 4), format_sig(r[1], 4));
                        if flag {
                            ui.label(RichText::new(format!("{text} excludes 0")).strong());
                        } else {
                            ui.label(text);
                        }
                    }
                    ui.end_row();
                }
            });
    });
}
