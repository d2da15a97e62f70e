//! Which test to read: the rules of common practice that choose between the pooled T²,
//! the unequal-covariance test and the permutation p-value, at fixed levels of their own.

#[allow(unused_imports)]
use super::*;

/// Box's M is judged at this level (common practice: M is very sensitive to non-normality).
pub const BOX_M_LEVEL: f64 = 0.001;
/// Mardia's tests are judged at this fixed level when choosing the test to read (common
/// practice), whatever alpha the comparison uses.
pub const MARDIA_LEVEL: f64 = 0.05;
/// In lots above 5,000 units a Mardia rejection counts only when the departure is material:
/// skewness `b1,p` at least this (a rule of thumb; common practice, no source)...
pub const MATERIAL_SKEWNESS: f64 = 0.5;
/// ...or kurtosis `b2,p` off its normal value `p(p + 2)` by at least this fraction.
pub const MATERIAL_KURTOSIS: f64 = 0.1;
/// Lot sizes differing by more than this ratio count as unbalanced (common practice).
pub const UNBALANCED_RATIO: f64 = 1.2;

/// The assumption checks that could not be computed for these lots, each with the reason
/// (empty when the checks were switched off: that is said on its own).
pub fn checks_not_computed(c: &Comparison) -> Vec<String> {
    if !c.settings.checks {
        return Vec::new();
    }
    let p = c.characteristics.len();
    let mut out = Vec::new();
    if c.box_m.is_none() {
        out.push(format!(
            "Box's M needs more units than characteristics in each lot ({} and {} units for \
             {p} characteristics)",
            c.lots[0].n, c.lots[1].n
        ));
    }
    if let Some(db) = &c.in_database {
        out.push(format!(
            "computed inside the database, where these need every unit: {}",
            db.not_computed.join("; ")
        ));
        if c.mardia.is_empty() {
            return out;
        }
    }
    let unit_data = c.discriminant.scores.is_some() || c.in_database.is_some();
    if !unit_data {
        out.push("Mardia's tests, Shapiro–Wilk and the outlier screen need unit data".into());
        return out;
    }
    for lot in &c.lots {
        if !c.mardia.iter().any(|m| m.lot == lot.name) {
            out.push(format!(
                "Mardia's tests for \"{}\" need a non-singular covariance ({} units for {p} \
                 characteristics)",
                lot.name, lot.n
            ));
        }
    }
    let mut no_sw: Vec<String> = Vec::new();
    for row in &c.normality {
        for (g, r) in row.lots.iter().enumerate() {
            // Above Shapiro–Wilk's range Anderson–Darling and K² stand in for it.
            if r.is_none() && row.large[g].is_none() {
                no_sw.push(format!(
                    "\"{}\" in \"{}\"",
                    row.characteristic, c.lots[g].name
                ));
            }
        }
    }
    if !no_sw.is_empty() {
        out.push(format!(
            "Shapiro–Wilk needs at least 3 units with some spread: not computed for {}",
            no_sw.join(", ")
        ));
    }
    out
}

/// Decides which test the assumption checks favour.
pub fn favour(c: &Comparison) -> Favoured {
    let (n1, n2) = (c.lots[0].n as f64, c.lots[1].n as f64);
    let unbalanced = n1.max(n2) / n1.min(n2) > UNBALANCED_RATIO;
    let box_p = c.box_m.as_ref().map(BoxM::preferred_p_value);
    let cov_differ = box_p.is_some_and(|p| p < BOX_M_LEVEL);
    let pooled = c.hotelling.p_value;
    if cov_differ
        && unbalanced
        && let Some(u) = &c.unequal_covariance
    {
        return Favoured {
            test: FavouredTest::UnequalCovariance,
            why: format!(
                "Box's M gives {} (below {BOX_M_LEVEL}, the level common practice uses \
                 because M is sensitive to non-normality) and the lots differ in size ({} and \
                 {} units): the pooled T² can then be far off its level, while the \
                 Krishnamoorthy–Yu test does not assume equal covariance matrices",
                p_text(box_p.unwrap_or(f64::NAN)),
                c.lots[0].n,
                c.lots[1].n
            ),
            p_value: u.p_value,
        };
    }
    let nonnormal: Vec<&str> = c
        .mardia
        .iter()
        .filter(|m| {
            let rejects = m.skewness_p < MARDIA_LEVEL || m.kurtosis_p < MARDIA_LEVEL;
            // Above Shapiro–Wilk's range every test rejects departures too small to matter:
            // there the departure must also be material (MATERIAL_SKEWNESS, MATERIAL_KURTOSIS).
            let n = c.lots.iter().find(|l| l.name == m.lot).map_or(0, |l| l.n);
            let p = c.characteristics.len() as f64;
            let material = m.skewness >= MATERIAL_SKEWNESS
                || (m.kurtosis / (p * (p + 2.0)) - 1.0).abs() >= MATERIAL_KURTOSIS;
            rejects && (n <= MAX_UNITS || material)
        })
        .map(|m| m.lot.as_str())
        .collect();
    if cov_differ {
        return Favoured {
            test: FavouredTest::PooledT2,
            why: format!(
                "Box's M gives {} (covariance matrices differ), but the lots are of similar \
                 size, where the pooled T² keeps its level (common practice); the \
                 unequal-covariance test is shown for comparison",
                p_text(box_p.unwrap_or(f64::NAN))
            ),
            p_value: pooled,
        };
    }
    if !nonnormal.is_empty()
        && let Some(perm) = &c.permutation
    {
        return Favoured {
            test: FavouredTest::Permutation,
            why: format!(
                "Mardia's tests reject multivariate normality at {MARDIA_LEVEL} in {}; the \
                 permutation p-value does not rely on it",
                nonnormal
                    .iter()
                    .map(|l| format!("\"{l}\""))
                    .collect::<Vec<_>>()
                    .join(" and ")
            ),
            p_value: perm.p_value,
        };
    }
    let skipped = checks_not_computed(c);
    let why = if !c.settings.checks {
        "the assumption checks were not run".to_string()
    } else if skipped.is_empty() {
        "no check contradicts its assumptions (equal covariance matrices, multivariate \
         normal lots)"
            .to_string()
    } else {
        format!(
            "no check that could be computed contradicts its assumptions, but not every check \
             could be: {}",
            skipped.join("; ")
        )
    };
    Favoured {
        test: FavouredTest::PooledT2,
        why,
        p_value: pooled,
    }
}
