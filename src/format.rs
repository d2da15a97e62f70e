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

/// Writes a mean (or a mean difference) to the data's own resolution plus one digit:
/// `decimals` is the number of decimal places the measurements carry (see
/// `stats::moments::resolution_decimals`); unknown (summary input) falls back to six
/// significant digits.
pub fn format_measure(x: f64, decimals: Option<u8>) -> String {
    match decimals {
        Some(d) if x.is_finite() => {
            let prec = usize::from(d) + 1;
            format!("{x:.prec$}")
        }
        _ => format_sig(x, 6),
    }
}

/// As [`format_measure`] with an explicit sign ("+0.0094", "−0.0031" with a true minus sign),
/// for a difference read as a direction.
pub fn format_signed_measure(x: f64, decimals: Option<u8>) -> String {
    let body = format_measure(x.abs(), decimals);
    if x < 0.0 {
        format!("−{body}")
    } else {
        format!("+{body}")
    }
}

/// One plain sentence per characteristic, read candidate − reference: "The candidate's hub
/// length is 0.0094 mm higher on average than the reference's (95% simultaneous interval
/// +0.0031 to +0.0157 mm, which excludes zero)."
pub fn shift_sentence(
    name: &str,
    unit: Option<&str>,
    difference: f64,
    simultaneous: [f64; 2],
    decimals: Option<u8>,
    confidence: &str,
) -> String {
    let unit = unit.map(|u| format!(" {u}")).unwrap_or_default();
    let how = if difference > 0.0 {
        "higher"
    } else if difference < 0.0 {
        "lower"
    } else {
        "the same"
    };
    let size = if difference == 0.0 {
        String::new()
    } else {
        format!("{}{unit} ", format_measure(difference.abs(), decimals))
    };
    let zero = simultaneous[0] <= 0.0 && simultaneous[1] >= 0.0;
    format!(
        "The candidate's {name} is {size}{how} on average than the reference's ({confidence}% \
         simultaneous interval {} to {}{unit}, which {} zero{}).",
        format_signed_measure(simultaneous[0], decimals),
        format_signed_measure(simultaneous[1], decimals),
        if zero { "includes" } else { "excludes" },
        if zero { ": no shift shown" } else { "" }
    )
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

    #[test]
    fn measures_carry_one_digit_beyond_the_data() {
        assert_eq!(format_measure(24.81234, Some(3)), "24.8123");
        assert_eq!(format_measure(24.8, Some(0)), "24.8");
        assert_eq!(format_measure(24.812345678, None), "24.8123");
        assert_eq!(format_signed_measure(-0.00312, Some(3)), "−0.0031");
        assert_eq!(format_signed_measure(0.00944, Some(3)), "+0.0094");
    }

    #[test]
    fn one_sentence_reads_the_direction() {
        assert_eq!(
            shift_sentence(
                "hub length",
                Some("mm"),
                0.00944,
                [0.0031, 0.0157],
                Some(3),
                "95"
            ),
            "The candidate's hub length is 0.0094 mm higher on average than the reference's \
             (95% simultaneous interval +0.0031 to +0.0157 mm, which excludes zero)."
        );
        let s = shift_sentence("wall", None, -0.2, [-0.5, 0.1], Some(1), "99");
        assert!(
            s.contains("0.20 lower") && s.contains("−0.50 to +0.10, which includes zero"),
            "{s}"
        );
    }
}
