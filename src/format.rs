//! How numbers are written for people: p-values, significant digits, confidence levels. A
//! leaf module (it imports nothing of lotshift), used by the text output, the HTML report and
//! the window alike, so the same number reads the same everywhere.

/// Formats a p-value for a table cell, by one rule everywhere: below 1e-16 as "< 1e-16",
/// below 1e-4 with four significant digits in exponent form, above 0.9999 as "> 0.9999" (never
/// "1.0000"), otherwise with four decimals.
pub fn format_p(p: f64) -> String {
    if p < 1e-16 {
        "< 1e-16".to_string()
    } else if p > 0.9999 && p <= 1.0 {
        "> 0.9999".to_string()
    } else if p < 1e-4 {
        format!("{p:.3e}")
    } else {
        format!("{p:.4}")
    }
}

/// Confidence level `1 − alpha` as a percentage without trailing zeros ("95", "99.9").
pub fn format_confidence(alpha: f64) -> String {
    let v = ((1.0 - alpha) * 100.0 * 1e6).round() / 1e6;
    format!("{v}")
}

/// Formats a number with `sig` significant digits, switching to exponent form when needed.
pub fn format_sig(x: f64, sig: usize) -> String {
    if !x.is_finite() {
        return if x.is_nan() {
            "n/a".into()
        } else {
            format!("{x}")
        };
    }
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-4..=8).contains(&mag) {
        return format!("{:.*e}", sig.saturating_sub(1), x);
    }
    let decimals = (sig as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

/// A p-value in a sentence: "p = 0.0023", "p < 1e-16", "p > 0.9999" (never "p = < 1e-16").
pub fn p_text(p: f64) -> String {
    let v = format_p(p);
    if v.starts_with(['<', '>']) {
        format!("p {v}")
    } else {
        format!("p = {v}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn p_values_follow_one_rule() {
        assert_eq!(format_p(1e-20), "< 1e-16");
        assert_eq!(p_text(1e-20), "p < 1e-16");
        assert_eq!(format_p(1.0), "> 0.9999");
        assert_eq!(p_text(0.99995), "p > 0.9999");
        assert_eq!(p_text(0.0023), "p = 0.0023");
        assert_eq!(format_p(3.5e-8), "3.500e-8");
    }
}
