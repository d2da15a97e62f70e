//! The shift-direction view: Fisher's discriminant direction as standardized coefficients,
//! and both lots' scores along it.

use egui::Color32;
use egui_plot::{Bar, BarChart, Legend, Plot, VLine};

use crate::analysis::format_sig;

use super::shown::Shown;
use super::theme::{lot_colors, lot_filled};
use super::widgets::row_names;

/// What the view says instead of the unit scores of a comparison made inside a database.
pub const NOT_COMPUTED_SCORES: &str =
    "Unit scores along the direction: not computed inside the database (no unit left it).";

/// Draws the direction view.
pub fn direction_ui(ui: &mut egui::Ui, s: &mut Shown) {
    let c = &s.comparison;
    let d = &c.discriminant;
    ui.label(
        "The direction along which the lots are furthest apart relative to their scatter \
         (Fisher's discriminant). Bars: standardized coefficients (each characteristic's weight \
         per pooled standard deviation), largest contribution first.",
    );
    let order: Vec<usize> = c
        .ranking
        .iter()
        .filter_map(|r| {
            c.characteristics
                .iter()
                .position(|n| n == &r.characteristic)
        })
        .collect();
    let names: Vec<String> = order
        .iter()
        .map(|&k| c.characteristics[k].clone())
        .collect();
    let bars: Vec<Bar> = order
        .iter()
        .enumerate()
        .map(|(row, &k)| {
            Bar::new(-(row as f64), d.standardized[k])
                .name(&c.characteristics[k])
                .width(0.6)
        })
        .collect();
    let half = ui.available_height() * 0.42;
    Plot::new("coefficients")
        .height(half.max(160.0))
        .allow_scroll(false)
        .y_axis_formatter(row_names(names))
        .y_axis_min_width(120.0)
        .x_axis_label("weight per standard deviation")
        .show(ui, |plot| {
            plot.vline(VLine::new("zero", 0.0).color(Color32::GRAY));
            plot.bar_chart(
                BarChart::new("standardized coefficients", bars)
                    .horizontal()
                    .color(Color32::from_rgb(110, 110, 160)),
            );
        });
    let n = (c.lots[0].n + c.lots[1].n) as f64;
    let mut line = String::new();
    if let Some(a) = d.apparent_misclassified {
        line.push_str(&format!(
            "Misclassified by the rule (a score above 0 is put with the candidate lot): {} of {} reference, {} of {} candidate ({:.1}%).",
            a[0],
            c.lots[0].n,
            a[1],
            c.lots[1].n,
            100.0 * (a[0] + a[1]) as f64 / n
        ));
    }
    if let (Some(l), Some(rate)) = (d.leave_one_out_misclassified, d.leave_one_out_rate) {
        line.push_str(&format!(
            " With each unit held out: {} and {} ({:.1}%).",
            l[0],
            l[1],
            100.0 * rate
        ));
    }
    ui.label(line);
    if c.in_database.is_some() {
        ui.label(NOT_COMPUTED_SCORES);
        return;
    }
    let Some(h) = &c.discriminant.score_histogram else {
        ui.weak("No unit scores to draw.");
        return;
    };
    let chart = |g: usize, color: Color32, name: &str| {
        // The reference lot's bars are filled, the candidate's drawn as outlines (palette).
        let filled = lot_filled(g);
        let bars = (0..h.counts[g].len())
            .map(|b| {
                let bar = Bar::new(h.start + (b as f64 + 0.5) * h.width, h.density(g, b))
                    .width(h.width)
                    .stroke(egui::Stroke::new(if filled { 1.0 } else { 1.8 }, color));
                if filled {
                    bar.fill(color.linear_multiply(0.45))
                } else {
                    bar
                }
            })
            .collect();
        BarChart::new(name.to_string(), bars).color(color)
    };
    let colors = lot_colors(ui);
    let ref_name = format!("reference: {}", c.lots[0].name);
    let cand_name = format!("candidate: {}", c.lots[1].name);
    Plot::new("scores")
        .height(ui.available_height().max(160.0))
        .legend(Legend::default())
        .allow_scroll(false)
        .x_axis_label(format!(
            "score along the direction, higher toward the candidate (0 = midpoint between the means; D² = {})",
            format_sig(c.hotelling.mahalanobis_d2, 4)
        ))
        .y_axis_label("density")
        .show(ui, |plot| {
            plot.bar_chart(chart(0, colors[0], &ref_name));
            plot.bar_chart(chart(1, colors[1], &cand_name));
            plot.vline(VLine::new("allocation cut-off", 0.0).color(Color32::GRAY));
        });
}
