//! The readable text form of a comparison, for the terminal.
//!
//! One job, kept in one file: the text output reads top to bottom as the file does.

use std::fmt::Write as _;

use crate::analysis::Comparison;
use crate::analysis::decision::MarginFrom;
use crate::data::Prepared;
use crate::format::{
    format_confidence, format_measure, format_p, format_sig, p_text, shift_sentence,
};
use crate::stats::checks::{BoxM, Mardia, UnequalCovariance};
use crate::stats::permutation::PermutationResult;

use super::CAUTION;

fn unit_suffix(u: &Option<String>) -> String {
    u.as_ref().map(|u| format!(" ({u})")).unwrap_or_default()
}

/// The data's resolution for a characteristic: the finer of the two lots'.
fn decimals_of(r: &crate::analysis::CharacteristicResult) -> Option<u8> {
    crate::stats::moments::finer_decimals(r.lots[0].decimals, r.lots[1].decimals)
}

/// A characteristic's unit for a table cell ("" when the header gave none).
fn unit_of(c: &Comparison, name: &str) -> String {
    c.characteristics
        .iter()
        .position(|n| n == name)
        .and_then(|k| c.units.get(k).cloned().flatten())
        .unwrap_or_default()
}

/// Renders a comparison as plain text.
/// `record`, when given, supplies the flagged outliers' rows and labels.
pub fn render_text(
    c: &Comparison,
    prepared: Option<&Prepared>,
    files: [&str; 2],
    record: Option<&super::Record>,
) -> String {
    let mut s = String::new();
    let h = &c.hotelling;
    let _ = writeln!(
        s,
        "lotshift comparison (every difference is candidate − reference: lot 2 minus lot 1)"
    );
    for (i, lot) in c.lots.iter().enumerate() {
        let extra = prepared
            .map(|p| {
                let pl = &p.lots[i];
                format!(
                    ", {} read, {} left out for missing cells",
                    pl.n_read, pl.n_excluded
                )
            })
            .unwrap_or_default();
        let _ = writeln!(
            s,
            "  lot {} ({}): \"{}\" from {} — {} units used{}",
            i + 1,
            ["reference", "candidate"][i],
            lot.name,
            files[i],
            lot.n,
            extra
        );
    }
    if let Some(p) = prepared {
        for e in &p.exclusions {
            let labels = crate::data::label_text(&e.labels);
            let _ = writeln!(
                s,
                "  set aside from lot {}: row {}{} — {}",
                e.lot + 1,
                e.row,
                labels.map(|l| format!(" ({l})")).unwrap_or_default(),
                e.reason
            );
        }
        for (i, pl) in p.lots.iter().enumerate() {
            if !pl.left_out.is_empty() {
                let all: Vec<String> = pl.left_out.iter().map(|u| u.describe()).collect();
                let shown = all.iter().take(10).cloned().collect::<Vec<_>>().join(", ");
                let more = all.len().saturating_sub(10);
                let _ = writeln!(
                    s,
                    "  left out of lot {} for missing cells: {shown}{}",
                    i + 1,
                    if more > 0 {
                        format!(" and {more} more (all in the record)")
                    } else {
                        String::new()
                    }
                );
            }
        }
        for m in &p.pairings {
            let _ = writeln!(
                s,
                "  paired by name: \"{}\" (lot 1) with \"{}\" (lot 2)",
                m.reference, m.candidate
            );
        }
        for u in &p.unmatched {
            let _ = writeln!(
                s,
                "  not compared: \"{}\" in lot {} ({})",
                u.column,
                u.lot + 1,
                u.why
            );
        }
    }
    if let Some(p) = record.and_then(|r| r.protocol.as_ref()) {
        let _ = writeln!(
            s,
            "  protocol: {}{} (SHA-256 {})",
            p.file,
            p.title
                .as_ref()
                .map(|t| format!(", \"{t}\""))
                .unwrap_or_default(),
            p.sha256
        );
        if p.signatures.is_empty() {
            let _ = writeln!(
                s,
                "  the protocol is NOT SIGNED: nobody's authorship, review or approval of it is recorded"
            );
        }
        for (k, sig) in p.signatures.iter().enumerate() {
            let comment = match sig.comment.as_deref().map(str::trim) {
                Some(c) if !c.is_empty() => format!(", comment \"{c}\""),
                _ => String::new(),
            };
            let _ = writeln!(
                s,
                "  protocol signature {}: {} by {} on {} (UTC){comment}",
                k + 1,
                sig.meaning,
                sig.signer,
                sig.signed_at
            );
        }
        if p.deviations.is_empty() {
            let _ = writeln!(s, "  run as the protocol fixes it: no deviation");
        }
        for d in &p.deviations {
            let _ = writeln!(
                s,
                "  DEVIATION from the protocol: {} — reason: {}",
                d.describe(),
                d.reason
            );
        }
    }
    if let Some(fields) = record.map(|r| &r.fields).filter(|f| !f.is_empty()) {
        for f in fields {
            let _ = writeln!(s, "  {}: {}", f.name, f.value);
        }
    }
    let _ = writeln!(s, "\nVerdict\n  {}", c.verdict);
    for w in &c.warnings {
        let _ = writeln!(s, "  warning: {w}");
    }
    decision_text(&mut s, c);
    let _ = writeln!(s, "\nHotelling's two-sample T² (alpha {})", c.alpha());
    let _ = writeln!(s, "  T²            {}", format_sig(h.t2, 6));
    let _ = writeln!(
        s,
        "  F             {}  on ({}, {}) df",
        format_sig(h.f, 6),
        h.df1,
        h.df2
    );
    let _ = writeln!(s, "  p-value       {}", format_p(h.p_value));
    let _ = writeln!(s, "  critical T²   {}", format_sig(h.critical_t2, 6));
    let _ = writeln!(s, "  critical F    {}", format_sig(h.critical_f, 6));
    let _ = writeln!(s, "  Mahalanobis D² {}", format_sig(h.mahalanobis_d2, 6));
    if let Some(d) = &c.detectable {
        let _ = writeln!(
            s,
            "  detectable    a shift of Mahalanobis distance {} is detected with power {} at \
             these lot sizes (along the observed direction: {})",
            format_sig(d.distance, 3),
            d.power,
            d.along_words(&c.characteristics)
        );
    }

    let _ = writeln!(s, "\nPer characteristic");
    let _ = writeln!(
        s,
        "  {:<22} {:>12} {:>12} {:>11} {:>10} {:>9} {:>9}",
        "characteristic", "mean ref.", "mean cand.", "cand − ref", "std diff", "t p", "Welch p"
    );
    for r in &c.per_characteristic {
        let decimals = decimals_of(r);
        let _ = writeln!(
            s,
            "  {:<22} {:>12} {:>12} {:>11} {:>10} {:>9} {:>9}",
            format!("{}{}", r.characteristic, unit_suffix(&r.unit)),
            format_measure(r.lots[0].mean, decimals),
            format_measure(r.lots[1].mean, decimals),
            format_sig(r.difference, 4),
            format_sig(r.standardized_difference, 3),
            format_p(r.pooled_p),
            format_p(r.welch_p)
        );
    }
    let _ = writeln!(
        s,
        "\nIntervals for the mean difference, candidate − reference, at {}% confidence, in each \
         characteristic's unit (* excludes zero)",
        format_confidence(c.alpha())
    );
    let _ = writeln!(
        s,
        "  {:<22} {:>6} {:>11} {:>25} {:>25} {:>25}",
        "characteristic", "unit", "cand − ref", "simultaneous (T²)", "Bonferroni", "one at a time"
    );
    let iv = |x: [f64; 2], flag: bool| {
        format!(
            "[{}, {}]{}",
            format_sig(x[0], 4),
            format_sig(x[1], 4),
            if flag { "*" } else { " " }
        )
    };
    for i in &c.intervals {
        let _ = writeln!(
            s,
            "  {:<22} {:>6} {:>11} {:>25} {:>25} {:>25}",
            i.characteristic,
            unit_of(c, &i.characteristic),
            format_sig(i.difference, 4),
            iv(i.simultaneous, i.excludes_zero[0]),
            iv(i.bonferroni, i.excludes_zero[1]),
            iv(i.one_at_a_time, i.excludes_zero[2])
        );
    }
    let conf = format_confidence(c.alpha());
    let _ = writeln!(s, "\nIn words");
    for (i, r) in c.intervals.iter().zip(&c.per_characteristic) {
        let _ = writeln!(
            s,
            "  {}",
            shift_sentence(
                &i.characteristic,
                r.unit.as_deref(),
                i.difference,
                i.simultaneous,
                decimals_of(r),
                &conf
            )
        );
    }
    let d = &c.discriminant;
    let _ = writeln!(s, "\nWhat drives the shift (discriminant direction)");
    if !c.hotelling.differ {
        let _ = writeln!(
            s,
            "  No difference was detected: this ranking then mostly shows noise."
        );
    }
    let _ = writeln!(
        s,
        "  {:<22} {:>12} {:>13} {:>12} {:>14}",
        "characteristic", "T² lost", "weight / SD", "corr. shift", "weight / unit"
    );
    for r in &c.ranking {
        let k = c
            .characteristics
            .iter()
            .position(|n| n == &r.characteristic)
            .unwrap_or(0);
        let _ = writeln!(
            s,
            "  {:<22} {:>12} {:>13} {:>12} {:>14}",
            r.characteristic,
            format_sig(r.t2_drop, 4),
            format_sig(d.standardized[k], 4),
            format_sig(d.structure[k], 3),
            format_sig(d.coefficients[k], 4)
        );
    }
    let _ = writeln!(
        s,
        "  T² lost: how much T² falls without the characteristic (correlated characteristics \
         share the shift, so these can add up to more than T²); weight / SD: the direction's \
         weight per standard deviation; corr. shift: the characteristic's correlation with the \
         direction; weight / unit: per unit of measure"
    );
    if let Some(a) = d.apparent_misclassified {
        let n = (c.lots[0].n + c.lots[1].n) as f64;
        let _ = writeln!(
            s,
            "  misclassified by the rule: {} of lot 1, {} of lot 2 (apparent rate {:.1}%)",
            a[0],
            a[1],
            100.0 * (a[0] + a[1]) as f64 / n
        );
    }
    if let (Some(l), Some(rate)) = (d.leave_one_out_misclassified, d.leave_one_out_rate) {
        let _ = writeln!(
            s,
            "  misclassified with each unit held out: {} of lot 1, {} of lot 2 (rate {:.1}%)",
            l[0],
            l[1],
            100.0 * rate
        );
    }
    checks_text(&mut s, c, record);
    let _ = writeln!(s, "\n{CAUTION}");
    s
}

/// The specification's part: margins, equivalence, capability, the fraction inside the limits.
fn decision_text(s: &mut String, c: &Comparison) {
    let Some(d) = &c.decision else {
        let _ = writeln!(
            s,
            "\nEquivalence: not assessed; it needs margins set in the quality plan (--spec with \
             margins, --margin-fraction, --margin-sd or --equivalence-distance)"
        );
        return;
    };
    let spec = &d.specification;
    let source = match (&spec.file, &spec.sha256) {
        (Some(f), Some(h)) => format!("{f} (SHA-256 {h})"),
        _ => "no file".into(),
    };
    let _ = writeln!(s, "\nSpecification: {source}; {}", spec.rule.describe());
    let unit = |k: usize| unit_suffix(&c.units[k]);
    for (k, e) in spec.characteristics.iter().enumerate() {
        if e.limits().is_none() && e.margin.is_none() {
            continue;
        }
        let opt = |v: Option<f64>| v.map_or("-".to_string(), |v| format_sig(v, 6));
        let margin = e.margin.map_or("-".to_string(), |m| {
            format!(
                "[{}, {}]{}",
                format_sig(m[0], 4),
                format_sig(m[1], 4),
                if e.margin_from == Some(MarginFrom::Rule) {
                    " (rule)"
                } else {
                    ""
                }
            )
        });
        let _ = writeln!(
            s,
            "  {:<22} lower {:>10}  target {:>10}  upper {:>10}  margin {}",
            format!("{}{}", e.characteristic, unit(k)),
            opt(e.lower),
            opt(e.target),
            opt(e.upper),
            margin
        );
    }
    if let Some(eq) = &d.equivalence {
        let conf = format_confidence(2.0 * eq.alpha);
        if !eq.per_characteristic.is_empty() {
            let _ = writeln!(
                s,
                "\nEquivalence per characteristic (two one-sided tests at alpha {}; difference = \
                 candidate − reference; {conf}% Welch interval; = lies within the margin, x lies \
                 wholly outside)",
                eq.alpha
            );
            let _ = writeln!(
                s,
                "  {:<22} {:>22} {:>11} {:>25} {:>9} {:>9}",
                "characteristic", "margin", "difference", "interval", "pooled p", "Welch p"
            );
            for r in &eq.per_characteristic {
                let flag = if r.equivalent {
                    "="
                } else if r.beyond {
                    "x"
                } else {
                    " "
                };
                let _ = writeln!(
                    s,
                    "  {:<22} {:>22} {:>11} {:>25} {:>9} {:>9}",
                    r.characteristic,
                    format!(
                        "[{}, {}]",
                        format_sig(r.margin[0], 4),
                        format_sig(r.margin[1], 4)
                    ),
                    format_sig(r.difference, 4),
                    format!(
                        "[{}, {}]{flag}",
                        format_sig(r.interval[0], 4),
                        format_sig(r.interval[1], 4)
                    ),
                    format_p(r.pooled_p),
                    format_p(r.welch_p)
                );
            }
            if let Some(all) = eq.all_equivalent {
                let _ = writeln!(
                    s,
                    "  every characteristic within its margin: {} (intersection–union: every \
                     test must reject; no multiplicity adjustment is needed)",
                    if all { "yes" } else { "no" }
                );
            }
        }
        if let Some(m) = &eq.multivariate {
            let _ = writeln!(
                s,
                "\nMultivariate equivalence (T² equivalence test, alpha {})",
                eq.alpha
            );
            let _ = writeln!(
                s,
                "  margin ε      {}{}",
                format_sig(m.epsilon, 6),
                if m.epsilon_from_margins {
                    " (from the margins and the pooled covariance of these data: the level \
                     holds only approximately; give --equivalence-distance to fix it in advance)"
                } else {
                    ""
                }
            );
            let _ = writeln!(s, "  distance D    {}", format_sig(m.d2.sqrt(), 6));
            let _ = writeln!(
                s,
                "  upper {}% bound of the distance  {}",
                format_confidence(eq.alpha),
                format_sig(m.distance_upper_bound, 6)
            );
            let _ = writeln!(
                s,
                "  F             {}  on ({}, {}) df; critical F {} (noncentrality {})",
                format_sig(m.f, 6),
                m.df1,
                m.df2,
                format_sig(m.critical_f, 6),
                format_sig(m.noncentrality, 6)
            );
            let _ = writeln!(
                s,
                "  p-value       {}  ({})",
                format_p(m.p_value),
                if m.equivalent {
                    "equivalent within ε"
                } else {
                    "equivalence not shown"
                }
            );
        }
    }
    if !d.capability.is_empty() {
        let _ = writeln!(
            s,
            "\nCapability ({}% intervals; expected ppm under a normal model)",
            format_confidence(c.alpha())
        );
        let _ = writeln!(
            s,
            "  {:<22} {:<4} {:>5} {:>24} {:>24} {:>13} {:>9}",
            "characteristic",
            "lot",
            "index",
            "value [interval]",
            "Cp [interval]",
            "expected ppm",
            "observed"
        );
        for r in &d.capability {
            for (g, l) in r.lots.iter().enumerate() {
                let cp = match (l.cp, l.cp_interval) {
                    (Some(v), Some(i)) => format!(
                        "{} [{}, {}]",
                        format_sig(v, 4),
                        format_sig(i[0], 4),
                        format_sig(i[1], 4)
                    ),
                    _ => "-".into(),
                };
                let _ = writeln!(
                    s,
                    "  {:<22} {:<4} {:>5} {:>24} {:>24} {:>13} {:>9}",
                    if g == 0 {
                        r.characteristic.as_str()
                    } else {
                        ""
                    },
                    g + 1,
                    l.index,
                    format!(
                        "{} [{}, {}]",
                        format_sig(l.cpk, 4),
                        format_sig(l.cpk_interval[0], 4),
                        format_sig(l.cpk_interval[1], 4)
                    ),
                    cp,
                    format_sig(l.ppm_expected, 4),
                    l.out_of_spec
                        .map_or("-".to_string(), |n| format!("{n}/{}", l.n))
                );
            }
        }
    }
    if let Some(ins) = &d.in_spec {
        let _ = writeln!(
            s,
            "\nInside every limit at once ({}; normal model by Genz's quasi-Monte Carlo, ± three \
             standard errors)",
            crate::stats::quote_list(&ins.characteristics)
        );
        for (g, l) in ins.lots.iter().enumerate() {
            let _ = writeln!(
                s,
                "  lot {}: expected {} ± {} (out: {} ppm); observed {}",
                g + 1,
                format_sig(l.expected, 8),
                format_sig(l.error, 2),
                format_sig(1e6 * (1.0 - l.expected).max(0.0), 4),
                l.observed.map_or("-".to_string(), |v| format_sig(v, 8))
            );
        }
    }
    for n in &d.notes {
        let _ = writeln!(s, "  note: {n}");
    }
    let _ = writeln!(
        s,
        "  Margins belong to the quality plan and are set before the data are seen; margins \
         chosen after looking at the results do not support an equivalence claim."
    );
}

/// Box's M in one line.
pub fn box_m_line(b: &BoxM) -> String {
    // The form the test is read in; the other form is in the record.
    if b.preferred == "F" {
        format!(
            "M = {}, read as F = {} on ({}, {:.0}) df, {}",
            format_sig(b.m, 5),
            format_sig(b.f, 5),
            b.f_df1,
            b.f_df2,
            p_text(b.f_p_value)
        )
    } else {
        format!(
            "M = {}, read as chi-square = {} on {} df, {}",
            format_sig(b.m, 5),
            format_sig(b.chi2, 5),
            b.df,
            p_text(b.p_value)
        )
    }
}

/// The unequal-covariance test in one line.
pub fn unequal_line(u: &UnequalCovariance) -> String {
    format!(
        "T² = {}, F = {} on ({}, {:.1}) df, {}",
        format_sig(u.t2, 5),
        format_sig(u.f, 5),
        u.df1,
        u.df2,
        p_text(u.p_value)
    )
}

/// The permutation p-value in one line, with one plain sentence on how many relabellings
/// were drawn and why the drawing stopped.
pub fn permutation_line(p: &PermutationResult) -> String {
    use crate::stats::permutation::StoppedBy;
    let drawn = p.draws();
    let value = match (p.stopped_by, p.p_interval) {
        (StoppedBy::LowerBoundary | StoppedBy::UpperBoundary, Some([lo, hi])) => {
            format!("between {} and {}", format_p(lo), format_p(hi))
        }
        (StoppedBy::Hits, _) => format_p(p.p_value),
        _ => {
            // Monte Carlo standard error of the estimated p-value over the draws made.
            let se = (p.p_value * (1.0 - p.p_value) / drawn.max(1) as f64).sqrt();
            format!(
                "{} ± {} (Monte Carlo standard error)",
                format_p(p.p_value),
                format_sig(se, 2)
            )
        }
    };
    if p.why.is_empty() {
        // A result from before sequential stopping.
        return format!(
            "{value}; {} of {} relabellings reached the observed T², seed {}",
            p.at_least_observed, p.permutations, p.seed
        );
    }
    if p.stopped_by == StoppedBy::All {
        let mut why = p.why.clone();
        if let Some(first) = why.get_mut(0..1) {
            first.make_ascii_uppercase();
        }
        return format!("{value}; seed {}. {why}.", p.seed);
    }
    format!(
        "{value}; seed {}. Stopped after {drawn} of at most {} relabellings: {}.",
        p.seed, p.permutations, p.why
    )
}

/// Mardia's tests of one lot in one line.
pub fn mardia_line(m: &Mardia) -> String {
    format!(
        "skewness b1 = {} (chi-square {} on {} df, {}), kurtosis b2 = {} (z = {}, {})",
        format_sig(m.skewness, 4),
        format_sig(m.skewness_stat, 4),
        m.skewness_df,
        p_text(m.skewness_p),
        format_sig(m.kurtosis, 4),
        format_sig(m.kurtosis_z, 3),
        p_text(m.kurtosis_p)
    )
}

fn checks_text(s: &mut String, c: &Comparison, record: Option<&super::Record>) {
    let any = c.box_m.is_some()
        || !c.mardia.is_empty()
        || c.unequal_covariance.is_some()
        || c.permutation.is_some();
    if !any {
        return;
    }
    let _ = writeln!(s, "\nAssumption checks and alternatives");
    if let Some(b) = &c.box_m {
        let _ = writeln!(
            s,
            "  Box's M (equal covariance matrices): {}; {}",
            box_m_line(b),
            b.why
        );
    }
    for m in &c.mardia {
        let _ = writeln!(s, "  Mardia, \"{}\": {}", m.lot, mardia_line(m));
    }
    // Characteristics without a Shapiro–Wilk result, folded into one line per lot.
    for g in 0..2 {
        let missing: Vec<&str> = c
            .normality
            .iter()
            .filter(|r| r.lots[g].is_none() && r.large[g].is_none())
            .map(|r| r.characteristic.as_str())
            .collect();
        if !missing.is_empty() {
            let _ = writeln!(
                s,
                "  Normality per characteristic, lot {}: not computed for {} (Shapiro–Wilk needs \
                 3 to {} units with some spread)",
                g + 1,
                missing.join(", "),
                crate::stats::normality::MAX_UNITS
            );
        }
    }
    for row in &c.normality {
        let cell = |g: usize| -> Option<String> {
            if let Some(r) = &row.lots[g] {
                return Some(format!(
                    "Shapiro–Wilk W = {}, {}",
                    format_sig(r.w, 4),
                    p_text(r.p_value)
                ));
            }
            row.large[g].as_ref().map(|l| {
                format!(
                    "skewness {}, excess kurtosis {}; Anderson–Darling A* = {}, {}; K² = {}, {}",
                    format_sig(l.skewness, 3),
                    format_sig(l.excess_kurtosis, 3),
                    format_sig(l.anderson_darling_modified, 4),
                    p_text(l.anderson_darling_p),
                    format_sig(l.k2, 4),
                    p_text(l.k2_p)
                )
            })
        };
        for g in 0..2 {
            if let Some(text) = cell(g) {
                let _ = writeln!(s, "  {:<22} lot {}: {text}", row.characteristic, g + 1);
            }
        }
    }
    if let Some(o) = &c.outliers {
        let count = |g: usize| o.units.iter().filter(|u| u.lot == g).count();
        let _ = writeln!(
            s,
            "  Outliers (squared Mahalanobis distance beyond the Beta cutoff at alpha/n): {} in lot 1 (cutoff {}), {} in lot 2 (cutoff {})",
            count(0),
            format_sig(o.cutoff[0], 4),
            count(1),
            format_sig(o.cutoff[1], 4)
        );
        if let Some(db) = &c.in_database {
            for u in &db.outliers {
                let labels: Vec<String> =
                    u.labels.iter().map(|(k, v)| format!("{k} {v}")).collect();
                let _ = writeln!(
                    s,
                    "    lot {}: {}: d² = {}, {}",
                    u.lot + 1,
                    if labels.is_empty() {
                        "a unit without labels".to_string()
                    } else {
                        labels.join(", ")
                    },
                    format_sig(u.d2, 4),
                    p_text(u.p_value)
                );
            }
            if db.outliers_truncated {
                let _ = writeln!(s, "    (the list stops at the first 1,000 per lot)");
            }
        } else if let Some(located) = record.and_then(|r| r.outliers.as_ref()) {
            for u in &located.units {
                let labels = crate::data::label_text(&u.labels);
                let _ = writeln!(
                    s,
                    "    lot {}: row {}{}: d² = {}, {}",
                    u.lot + 1,
                    u.row.map_or("?".to_string(), |r| r.to_string()),
                    labels.map(|l| format!(" ({l})")).unwrap_or_default(),
                    format_sig(u.d2, 4),
                    p_text(u.p_value)
                );
            }
        }
        if let Some(w) = &c.without_outliers {
            let _ = writeln!(
                s,
                "    without them: T² = {}, {} ({})",
                format_sig(w.t2, 5),
                p_text(w.p_value),
                if w.same_decision {
                    "the decision holds"
                } else {
                    "the decision changes"
                }
            );
        }
    }
    if let Some(u) = &c.unequal_covariance {
        let _ = writeln!(
            s,
            "  Unequal covariances (Krishnamoorthy–Yu): {}",
            unequal_line(u)
        );
    }
    if let Some(p) = &c.permutation {
        let _ = writeln!(s, "  Permutation p-value: {}", permutation_line(p));
    }
    let _ = writeln!(s, "  Favoured: {} — {}", c.favoured.test, c.favoured.why);
    if let Some(db) = &c.in_database {
        let _ = writeln!(
            s,
            "  Computed inside the database from aggregate statements; not computed this way              (they need every unit): {}",
            db.not_computed.join("; ")
        );
    }
}
