//! Small drawing helpers shared by the views and panels: legend keys, row-named plot axes, and
//! when a dragged value counts as changed.

use egui::Color32;

use super::theme::{lot_colors, lot_filled};

/// A small square in `color` as a legend key, filled or as an outline (the lots' marker
/// fills, see [`crate::palette`]).
pub fn swatch(ui: &mut egui::Ui, color: Color32, filled: bool) {
    let (rect, _) = ui.allocate_exact_size(egui::vec2(12.0, 12.0), egui::Sense::hover());
    if !filled {
        ui.painter().rect_stroke(
            rect.shrink(1.0),
            2.0,
            egui::Stroke::new(2.0, color),
            egui::StrokeKind::Inside,
        );
    } else {
        ui.painter().rect_filled(rect, 2.0, color);
    }
}

/// The legend key of lot `g` (0 reference, 1 candidate): its colour and its marker fill.
pub fn lot_swatch(ui: &mut egui::Ui, g: usize) {
    let color = lot_colors(ui)[g];
    swatch(ui, color, lot_filled(g));
}

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

/// A dragged value counts once the drag ends (a typed or stepped value at once), so dragging
/// does not start a run every frame.
pub fn settled(r: &egui::Response) -> bool {
    r.changed() && !r.dragged() || r.drag_stopped()
}
