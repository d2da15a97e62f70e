//! The two lots' colours and marker fills in the window's theme, from [`crate::palette`]
//! (which the HTML report uses too): the print shades on a light background, the lighter
//! shades on a dark one.

use egui::Color32;

/// Colours of the reference and candidate lots in every plot, for the window's theme.
pub fn lot_colors(ui: &egui::Ui) -> [Color32; 2] {
    let dark = ui.visuals().dark_mode;
    crate::palette::LOTS.map(|s| {
        let c = if dark { s.rgb_on_dark } else { s.rgb };
        Color32::from_rgb(c[0], c[1], c[2])
    })
}

/// Whether lot `g`'s markers (units, means, histogram bars, legend keys) are filled.
pub fn lot_filled(g: usize) -> bool {
    crate::palette::LOTS[g].filled
}
