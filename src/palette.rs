//! How the two lots look in every chart: one colour and one marker fill per lot, defined once
//! and used by the window and the HTML report alike (a leaf module: it imports nothing).
//!
//! The pair is the project's own: a deep indigo for the reference lot and a dark amber for the
//! candidate lot. Indigo against amber differs along the blue–yellow axis, which stays visible
//! to readers with red–green colour-vision deficiencies (the common ones), and the two differ
//! strongly in lightness, so they stay apart for the rarer blue–yellow deficiency and on a
//! greyscale print too. The marker fill is the second cue: the reference lot's units and
//! means are filled, the candidate lot's hollow.

/// The look of one lot in charts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LotStyle {
    /// Colour as red, green, blue.
    pub rgb: [u8; 3],
    /// The same colour as a CSS hex string.
    pub hex: &'static str,
    /// A lighter shade of the same hue for dark backgrounds (the window's dark theme).
    pub rgb_on_dark: [u8; 3],
    /// Whether the lot's markers (units, means, histogram bars) are filled (else hollow).
    pub filled: bool,
}

/// The reference lot: deep indigo, filled markers.
pub const REFERENCE: LotStyle = LotStyle {
    rgb: [0x2b, 0x35, 0x94],
    hex: "#2b3594",
    rgb_on_dark: [0x8c, 0x98, 0xff],
    filled: true,
};

/// The candidate lot: dark amber, hollow markers.
pub const CANDIDATE: LotStyle = LotStyle {
    rgb: [0xc2, 0x7c, 0x0e],
    hex: "#c27c0e",
    rgb_on_dark: [0xf0, 0xa8, 0x30],
    filled: false,
};

/// Both lots, reference first.
pub const LOTS: [LotStyle; 2] = [REFERENCE, CANDIDATE];

/// Relative luminance (WCAG 2.x definition) of an sRGB colour, 0 (black) to 1 (white).
pub fn relative_luminance(rgb: [u8; 3]) -> f64 {
    let lin = |c: u8| {
        let c = f64::from(c) / 255.0;
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    };
    0.2126 * lin(rgb[0]) + 0.7152 * lin(rgb[1]) + 0.0722 * lin(rgb[2])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hex_matches_rgb() {
        for s in LOTS {
            let hex = format!("#{:02x}{:02x}{:02x}", s.rgb[0], s.rgb[1], s.rgb[2]);
            assert_eq!(hex, s.hex);
        }
    }

    #[test]
    fn the_lots_stay_apart_in_greyscale_and_by_marker() {
        // WCAG 2.x contrast ratio (L1 + 0.05)/(L2 + 0.05) between the two lot colours: at least
        // 3 (the WCAG minimum for graphical objects), so a greyscale print separates them.
        let l = LOTS.map(|s| relative_luminance(s.rgb));
        let ratio = (l[1].max(l[0]) + 0.05) / (l[1].min(l[0]) + 0.05);
        assert!(ratio >= 3.0, "contrast {ratio}");
        assert_ne!(REFERENCE.filled, CANDIDATE.filled);
    }

    #[test]
    fn dark_shades_stand_out_on_a_dark_background() {
        // WCAG 2.x contrast against egui's dark panel colour (27, 27, 27): at least 4.5.
        let bg = relative_luminance([27, 27, 27]);
        for s in LOTS {
            let ratio = (relative_luminance(s.rgb_on_dark) + 0.05) / (bg + 0.05);
            assert!(ratio >= 4.5, "{:?}: {ratio}", s.rgb_on_dark);
        }
    }

    #[test]
    fn the_lots_differ_on_the_blue_yellow_axis() {
        // Red-green deficient vision keeps the blue-yellow opponent channel, roughly
        // (R + G)/2 − B: the two colours must lie on opposite sides of it.
        let by =
            |s: LotStyle| (f64::from(s.rgb[0]) + f64::from(s.rgb[1])) / 2.0 - f64::from(s.rgb[2]);
        assert!(by(REFERENCE) < -50.0 && by(CANDIDATE) > 50.0);
    }
}
