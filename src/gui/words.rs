//! Wording shared by several views: the test line, margins and shares in words, the name of
//! a specification edited in the window and the caution that goes with margins.

use super::shown::Shown;

/// File name (and path) of a specification edited in the window and not saved yet.
pub const EDITED: &str = "(edited in the window)";

/// The caution shown with the margins.
pub const MARGIN_CAUTION: &str = "Margins belong to the quality plan and are set before the \
     data are seen. Copy them from the plan: margins chosen or adjusted after looking at these \
     results do not support an equivalence claim.";

/// p-value and statistic line used by several views.
pub fn test_line(s: &Shown) -> String {
    crate::analysis::test_statistics(&s.comparison.hotelling, 5)
}

/// A limit or margin for reading: as typed when short (0.0075), else four significant
/// digits (a margin a rule computed).
pub fn short_number(v: f64) -> String {
    let t = format!("{v}");
    if t.len() <= 10 {
        t
    } else {
        crate::analysis::format_sig(v, 4)
    }
}

/// A margin (allowed candidate − reference) for reading: "± 0.03", or "−0.2 to +0.3".
/// " mm" for a characteristic measured in mm (by name), "" without a unit.
pub fn unit_suffix(c: &crate::analysis::Comparison, characteristic: &str) -> String {
    c.characteristics
        .iter()
        .position(|n| n == characteristic)
        .and_then(|k| c.units.get(k).cloned().flatten())
        .map(|u| format!(" {u}"))
        .unwrap_or_default()
}

pub fn margin_words(m: [f64; 2]) -> String {
    if -m[0] == m[1] {
        format!("± {}", short_number(m[1]))
    } else {
        format!("−{} to +{}", short_number(-m[0]), short_number(m[1]))
    }
}

/// The share of a lot's units observed inside every limit, in words.
pub fn observed_words(share: f64) -> String {
    if share == 1.0 {
        "all units".into()
    } else {
        format!(
            "{}% of the units",
            crate::analysis::format_sig(100.0 * share, 4)
        )
    }
}

/// A lot name as part of a file name: letters, digits and hyphens kept, the rest `_`.
pub fn file_part(s: &str) -> String {
    s.chars()
        .map(|c| {
            if c.is_alphanumeric() || c == '-' {
                c
            } else {
                '_'
            }
        })
        .collect()
}
