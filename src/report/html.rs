//! A self-contained HTML rendering of a comparison record or signed summary: the verdict, the
//! tables, inline SVG charts (intervals, discriminant scores, the most separating pair's
//! ellipses), the signature manifestation and the caution; print styles for A4 and Letter.
//!
//! It reads the typed [`Record`] (a file that does not parse as one is refused by the caller,
//! never drawn half empty); the pair chart's ellipses and the score histogram's densities come
//! from the analysis (`analysis::pair_geometry`, `ScoreHistogram::density`), as in the window.
//!
//! One job, kept in one file: the self-contained page, its style and its charts are written together.

use std::fmt::Write as _;

use super::sections::{EquivalenceRecord, MarginFromRecord};
use super::sign::SignatureBlock;
use super::{CAUTION, Record};
use crate::analysis::decision::{MarginRule, Outcome};
use crate::analysis::{FavouredTest, ScoreHistogram, pair_geometry};
use crate::format::{
    format_confidence, format_measure, format_p, format_sig, p_text, shift_sentence,
};
use crate::stats::moments::finer_decimals;

/// Coverage of the data ellipses in the pair chart: the window's default.
const DATA_COVERAGE: f64 = 0.95;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The name of lot `i` (0 reference, 1 candidate), empty when the record has no such lot.
fn lot_name(r: &Record, i: usize) -> String {
    r.lots.get(i).map(|l| l.name.clone()).unwrap_or_default()
}

const STYLE: &str = r#"
body { font-family: "DejaVu Sans", Arial, sans-serif; color: #1b1b1b; margin: 24px auto; max-width: 1000px; line-height: 1.4; }
h1 { font-size: 22px; margin-bottom: 4px; } h2 { font-size: 16px; margin: 22px 0 6px; border-bottom: 1px solid #999; }
.verdict { font-size: 15px; padding: 10px 12px; border-left: 5px solid #555; background: #f3f3f3; }
.differ { border-left-color: #b5561a; } .same { border-left-color: #2e6fc4; }
table { border-collapse: collapse; font-size: 12px; margin: 6px 0; }
th, td { border: 1px solid #bbb; padding: 3px 6px; text-align: right; } th { background: #eee; }
td.name, th.name { text-align: left; }
td.when { white-space: nowrap; }
.caution { font-style: italic; margin-top: 18px; }
.signature { border: 2px solid #333; padding: 10px 14px; margin-top: 18px; }
.muted { color: #555; font-size: 12px; }
svg { display: block; margin: 8px 0; }
.chart, .keep { break-inside: avoid; page-break-inside: avoid; }
h3 { font-size: 13px; margin: 12px 0 2px; }
.chart h2, .chart h3 { break-after: avoid; page-break-after: avoid; }
@page { margin: 14mm 14mm 20mm 14mm; }
@media print {
  body { margin: 0; max-width: none; font-size: 10pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  table, .signature, .verdict { break-inside: avoid; page-break-inside: avoid; }
  svg { max-width: 100%; height: auto; }
}
"#;

/// The caution in the footer of every printed page (a CSS page-margin box, so it never
/// covers the content).
fn page_footer() -> String {
    let quoted: String = CAUTION
        .chars()
        .flat_map(|c| match c {
            '"' | '\\' => vec!['\\', c],
            c => vec![c],
        })
        .collect();
    format!(
        "@page {{ @bottom-center {{ content: \"{quoted}\"; font-family: \"DejaVu Sans\", Arial, sans-serif; font-size: 7.5pt; font-style: italic; color: #333; }} }}"
    )
}

/// Renders a record (`signature` absent) or a summary with one signature as one HTML page.
pub fn render_html(record: &Record, signature: Option<&SignatureBlock>) -> String {
    render_html_signed(record, signature.map_or(&[][..], std::slice::from_ref))
}

/// Renders a record (no `signatures`) or a signed summary (its signatures, in order) as one
/// HTML page.
pub fn render_html_signed(record: &Record, signatures: &[SignatureBlock]) -> String {
    let r = record;
    let mut h = String::new();
    let lot_name = |i: usize| lot_name(r, i);
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>lotshift comparison: {} vs {}</title><style>{STYLE}{}</style></head><body>\n",
        esc(&lot_name(0)),
        esc(&lot_name(1)),
        page_footer()
    );
    let _ = writeln!(
        h,
        "<h1>Lot comparison: {} (reference) vs {} (candidate)</h1><div class=\"muted\">{} {}; analysed {}; {}</div>",
        esc(&lot_name(0)),
        esc(&lot_name(1)),
        esc(&r.software.name),
        esc(&r.software.version),
        esc(r.analysed_at.as_deref().unwrap_or("(time not recorded)")),
        if r.schema == super::SCHEMA_V1 {
            "a record of schema lotshift.comparison/1: its differences (not those of the equivalence section) are reference minus candidate"
        } else {
            "every difference is candidate minus reference"
        }
    );
    fields_section(&mut h, r);
    let differ = r.hotelling.differ;
    let _ = writeln!(
        h,
        "<h2>Verdict</h2><div class=\"verdict {}\" id=\"verdict\">{}</div>",
        if differ { "differ" } else { "same" },
        esc(&r.verdict)
    );
    for w in &r.warnings {
        let _ = writeln!(h, "<p><b>Warning:</b> {}</p>", esc(w));
    }
    decision_section(&mut h, r);
    lots_section(&mut h, r);
    test_section(&mut h, r);
    characteristics_section(&mut h, r);
    let _ = writeln!(
        h,
        "<h2>Intervals for the mean differences ({}% confidence)</h2>",
        format_confidence(r.alpha)
    );
    intervals_table(&mut h, r);
    h.push_str(&interval_chart(r));
    let _ = writeln!(h, "<h2>What drives the shift</h2>");
    ranking_table(&mut h, r);
    h.push_str(&score_chart(r));
    h.push_str(&pair_chart(r));
    checks_section(&mut h, r);
    settings_section(&mut h, r);
    trail_section(&mut h, r);
    let _ = writeln!(h, "<p class=\"caution\">{}</p>", esc(CAUTION));
    if signatures.is_empty() {
        let _ = writeln!(
            h,
            "<div class=\"signature\" id=\"signature\">Not signed.</div>"
        );
    }
    let n = signatures.len();
    for (k, s) in signatures.iter().enumerate() {
        let id = if k == 0 {
            "signature".to_string()
        } else {
            format!("signature-{}", k + 1)
        };
        let comment = match s.comment.as_deref().map(str::trim) {
            Some(c) if !c.is_empty() => format!("<br>Comment: {}", esc(c)),
            _ => String::new(),
        };
        let covers = if k == 0 {
            "the record and this signature manifestation"
        } else {
            "the record, every earlier signature and this signature manifestation"
        };
        let _ = writeln!(
            h,
            "<div class=\"signature\" id=\"{id}\"><b>Electronically signed</b> (signature {} of {n})<br>Signed by: <b>{}</b><br>Date and time of signing (UTC): {}<br>Meaning of the signature: <b>{}</b>{comment}<br>Key fingerprint: <code>{}</code><br><span class=\"muted\">{} signature over the {} canonical form of {covers}. Check it with <code>lotshift verify SUMMARY.json --trusted SIGNERS.json --files REFERENCE CANDIDATE</code>; this printout alone does not prove the signature.</span></div>",
            k + 1,
            esc(&s.signer),
            esc(&s.signed_at),
            esc(s.meaning.as_str()),
            esc(&s.key_fingerprint),
            esc(&s.algorithm),
            esc(&s.canonicalization)
        );
    }
    h.push_str("</body></html>\n");
    h
}

/// Specification, equivalence and capability (a record without a specification, as records
/// made before specifications existed, gives a one-line note).
fn decision_section(h: &mut String, r: &Record) {
    let Some(spec) = &r.specification else {
        h.push_str(
            "<p class=\"muted\" id=\"equivalence\">Equivalence not assessed: it needs margins set in the quality plan.</p>\n",
        );
        return;
    };
    if let Some(o) = r.outcome {
        let _ = writeln!(
            h,
            "<p id=\"outcome\"><b>{}.</b></p>",
            esc(Outcome::from(o).words())
        );
    }
    let source = match (&spec.file, &spec.sha256) {
        (Some(f), Some(s)) => format!("{} (SHA-256 <code>{}</code>)", esc(f), esc(s)),
        _ => "no file".into(),
    };
    let _ = writeln!(
        h,
        "<h2>Specification and margins</h2><div class=\"muted\">{source}; {}. Margins are the allowed candidate minus reference difference, set in the quality plan before the data are seen.</div>",
        esc(&MarginRule::from(spec.rule).describe())
    );
    h.push_str("<table><tr><th class=\"name\">characteristic</th><th>lower</th><th>target</th><th>upper</th><th>margin</th></tr>\n");
    let opt = |v: Option<f64>| v.map_or("–".to_string(), |v| format_sig(v, 6));
    for e in &spec.characteristics {
        let margin = e.margin.map_or("–".to_string(), |m| {
            format!(
                "[{}, {}]{}",
                format_sig(m[0], 4),
                format_sig(m[1], 4),
                if e.margin_from == Some(MarginFromRecord::Rule) {
                    " (rule)"
                } else {
                    ""
                }
            )
        });
        let _ = writeln!(
            h,
            "<tr><td class=\"name\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{margin}</td></tr>",
            esc(&e.characteristic),
            opt(e.lower),
            opt(e.target),
            opt(e.upper)
        );
    }
    h.push_str("</table>\n");
    if let Some(eq) = &r.equivalence {
        if !eq.per_characteristic.is_empty() {
            let _ = writeln!(
                h,
                "<h2>Equivalence per characteristic (two one-sided tests, alpha {})</h2><table id=\"equivalence\"><tr><th class=\"name\">characteristic</th><th>margin</th><th>difference (cand. − ref.)</th><th>{}% interval (Welch)</th><th>p (pooled)</th><th>p (Welch)</th><th class=\"name\">result</th></tr>",
                eq.alpha,
                format_confidence(2.0 * eq.alpha)
            );
            for row in &eq.per_characteristic {
                let _ = writeln!(
                    h,
                    "<tr><td class=\"name\">{}</td><td>[{}, {}]</td><td>{}</td><td>[{}, {}]</td><td>{}</td><td>{}</td><td class=\"name\">{}</td></tr>",
                    esc(&row.characteristic),
                    format_sig(row.margin[0], 4),
                    format_sig(row.margin[1], 4),
                    format_sig(row.difference, 4),
                    format_sig(row.interval[0], 4),
                    format_sig(row.interval[1], 4),
                    format_p(row.pooled_p),
                    format_p(row.welch_p),
                    if row.equivalent {
                        "within the margin"
                    } else if row.beyond {
                        "<b>wholly outside the margin</b>"
                    } else {
                        "<b>not shown within</b>"
                    }
                );
            }
            h.push_str("</table>\n");
            h.push_str(&margin_chart(eq));
        }
        if let Some(m) = &eq.multivariate {
            let _ = writeln!(
                h,
                "<h2>Multivariate equivalence (T² equivalence test, alpha {})</h2><table><tr><th class=\"name\">margin ε on the distance</th><td>{}{}</td></tr><tr><th class=\"name\">distance D</th><td>{}</td></tr><tr><th class=\"name\">upper {}% bound of the distance</th><td>{}</td></tr><tr><th class=\"name\">F</th><td>{} on ({}, {}) df; critical F {}</td></tr><tr><th class=\"name\">p-value</th><td>{} ({})</td></tr></table>",
                eq.alpha,
                format_sig(m.epsilon, 6),
                if m.epsilon_from_margins {
                    " (from the margins and these data: level approximate)"
                } else {
                    ""
                },
                format_sig(m.d2.sqrt(), 6),
                format_confidence(eq.alpha),
                format_sig(m.distance_upper_bound, 6),
                format_sig(m.f, 6),
                m.df1,
                m.df2,
                format_sig(m.critical_f, 6),
                format_p(m.p_value),
                if m.equivalent {
                    "equivalent within ε"
                } else {
                    "not shown"
                }
            );
        }
    }
    let cap = &r.capability;
    if !cap.is_empty() {
        let _ = writeln!(
            h,
            "<h2>Capability ({}% intervals; expected ppm under a normal model)</h2><table id=\"capability\"><tr><th class=\"name\">characteristic</th><th class=\"name\">lot</th><th>index</th><th>value [interval]</th><th>Cp [interval]</th><th>expected ppm</th><th>observed out of spec</th></tr>",
            format_confidence(r.alpha)
        );
        for row in cap {
            for (g, l) in row.lots.iter().enumerate() {
                let cp = match (l.cp, l.cp_interval) {
                    (Some(v), Some(i)) => format!(
                        "{} [{}, {}]",
                        format_sig(v, 4),
                        format_sig(i[0], 4),
                        format_sig(i[1], 4)
                    ),
                    _ => "–".into(),
                };
                let _ = writeln!(
                    h,
                    "<tr><td class=\"name\">{}</td><td class=\"name\">{}</td><td>{}</td><td>{} [{}, {}]</td><td>{cp}</td><td>{}</td><td>{}</td></tr>",
                    if g == 0 {
                        esc(&row.characteristic)
                    } else {
                        String::new()
                    },
                    esc(&lot_name(r, g)),
                    esc(&l.index),
                    format_sig(l.cpk, 4),
                    format_sig(l.cpk_interval[0], 4),
                    format_sig(l.cpk_interval[1], 4),
                    format_sig(l.ppm_expected, 4),
                    l.out_of_spec
                        .map_or("–".to_string(), |n| format!("{n} of {}", l.n))
                );
            }
        }
        h.push_str("</table>\n");
    }
    if let Some(ins) = &r.in_spec {
        let _ = writeln!(
            h,
            "<h2>Inside every limit at once</h2><div class=\"muted\">Over {} (normal model, Genz's quasi-Monte Carlo; ± three standard errors)</div><table><tr><th class=\"name\">lot</th><th>expected inside</th><th>expected out (ppm)</th><th>observed inside</th></tr>",
            esc(&crate::stats::quote_list(&ins.characteristics))
        );
        for (g, l) in ins.lots.iter().enumerate() {
            let _ = writeln!(
                h,
                "<tr><td class=\"name\">{}</td><td>{} ± {}</td><td>{}</td><td>{}</td></tr>",
                esc(&lot_name(r, g)),
                format_sig(l.expected, 8),
                format_sig(l.error, 2),
                format_sig(1e6 * (1.0 - l.expected).max(0.0), 4),
                l.observed.map_or("–".to_string(), |v| format_sig(v, 8))
            );
        }
        h.push_str("</table>\n");
    }
}

/// Each characteristic's 1 − 2 alpha interval against its margin, every row scaled to its own
/// margin (−1 and +1 are the margin's ends for a symmetric margin).
fn margin_chart(eq: &EquivalenceRecord) -> String {
    let rows = &eq.per_characteristic;
    let half = |m: [f64; 2]| (-m[0]).max(m[1]);
    let mut lo: f64 = -1.0;
    let mut hi: f64 = 1.0;
    for r in rows {
        let w = half(r.margin);
        lo = lo.min(r.interval[0] / w).min(r.margin[0] / w);
        hi = hi.max(r.interval[1] / w).max(r.margin[1] / w);
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return String::new();
    }
    let pad = 0.05 * (hi - lo);
    let (lo, hi) = (lo - pad, hi + pad);
    let (w, left, right) = (900.0, 170.0, 880.0);
    let row = 30.0;
    let height = 40.0 + row * rows.len() as f64;
    let x = scale(lo, hi, left, right);
    let mut s = format!(
        "<div class=\"chart\"><h3>Chart: each characteristic's interval against its margin</h3><svg id=\"margin-chart\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{height}\" viewBox=\"0 0 {w} {height}\" font-size=\"12\">"
    );
    for (k, r) in rows.iter().enumerate() {
        let y = 22.0 + row * k as f64;
        let wd = half(r.margin);
        let _ = write!(
            s,
            "<text x=\"{}\" y=\"{}\" text-anchor=\"end\">{}{}</text><rect x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"16\" fill=\"#dfe8d8\" stroke=\"#7a9a6a\"/><line x1=\"{:.1}\" x2=\"{:.1}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#1b1b1b\" stroke-width=\"3\"/><circle cx=\"{:.1}\" cy=\"{y:.1}\" r=\"4\" fill=\"#1b1b1b\"/>",
            left - 8.0,
            y + 4.0,
            esc(&r.characteristic),
            if r.equivalent { " ✓" } else { " ✗" },
            x(r.margin[0] / wd),
            y - 8.0,
            x(r.margin[1] / wd) - x(r.margin[0] / wd),
            x(r.interval[0] / wd),
            x(r.interval[1] / wd),
            x(r.difference / wd)
        );
    }
    let _ = write!(
        s,
        "<line x1=\"{0}\" x2=\"{0}\" y1=\"8\" y2=\"{1}\" stroke=\"#888\" stroke-dasharray=\"4 3\"/><text x=\"{2}\" y=\"{3}\" text-anchor=\"middle\">candidate − reference, in units of each margin (band: the margin; bar: the {4}% interval; ✓ within, ✗ not shown within)</text></svg></div>",
        x(0.0),
        height - 26.0,
        (left + right) / 2.0,
        height - 6.0,
        format_confidence(2.0 * eq.alpha)
    );
    s
}

fn lots_section(h: &mut String, r: &Record) {
    let _ = writeln!(
        h,
        "<h2>Lots</h2><table><tr><th class=\"name\">lot</th><th class=\"name\">file</th><th class=\"name\">SHA-256</th><th>units read</th><th>left out (missing cells)</th><th>compared</th></tr>"
    );
    for l in &r.lots {
        let _ = writeln!(
            h,
            "<tr><td class=\"name\">{}</td><td class=\"name\">{}</td><td class=\"name\"><code>{}</code></td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&l.name),
            esc(l.file.as_deref().unwrap_or_default()),
            esc(l.sha256.as_deref().unwrap_or_default()),
            l.n_read,
            l.n_excluded,
            l.n
        );
    }
    h.push_str("</table>\n");
    for u in &r.unmatched {
        let _ = writeln!(
            h,
            "<div class=\"muted\">Not compared: \"{}\" ({})</div>",
            esc(&u.column),
            esc(&u.why)
        );
    }
    for m in &r.pairings {
        let _ = writeln!(
            h,
            "<div class=\"muted\">Paired by name: \"{}\" (reference) with \"{}\" (candidate)</div>",
            esc(&m.reference),
            esc(&m.candidate)
        );
    }
    let labels = |l: &[(String, String)]| {
        l.iter()
            .filter(|(_, v)| !v.is_empty())
            .take(2)
            .map(|(k, v)| format!("{} {}", esc(k), esc(v)))
            .collect::<Vec<_>>()
            .join("; ")
    };
    if !r.exclusions.is_empty() {
        h.push_str("<p id=\"exclusions\"><b>Units set aside before the comparison</b></p><table><tr><th class=\"name\">lot</th><th>row</th><th class=\"name\">labels</th><th class=\"name\">reason</th></tr>\n");
        for e in &r.exclusions {
            let _ = writeln!(
                h,
                "<tr><td class=\"name\">{}</td><td>{}</td><td class=\"name\">{}</td><td class=\"name\">{}</td></tr>",
                esc(r.lots.get(e.lot).map_or("", |l| l.name.as_str())),
                e.row,
                labels(&e.labels),
                esc(&e.reason)
            );
        }
        h.push_str("</table>\n");
    }
    for l in &r.lots {
        for u in &l.left_out {
            let _ = writeln!(
                h,
                "<div class=\"muted\">Left out of \"{}\" for a missing cell: row {} ({}; missing {})</div>",
                esc(&l.name),
                u.row,
                labels(&u.labels),
                esc(&u.missing.join(", "))
            );
        }
    }
}

/// The protocol's signatures as the record holds them (each one's manifestation), or a plain
/// line that it is not signed.
fn protocol_signatures(h: &mut String, p: &super::ProtocolRecord) {
    if p.signatures.is_empty() {
        h.push_str(
            "<p id=\"protocol-signatures\"><b>The protocol is not signed:</b> no authorship, review or approval of it is recorded.</p>\n",
        );
        return;
    }
    let _ = write!(
        h,
        "<div class=\"keep\" id=\"protocol-signatures\"><b>Signatures of the protocol</b> <span class=\"muted\">({} in sequence, each an Ed25519 signature over the protocol's SHA-256 and every earlier one; <code>lotshift verify SUMMARY --trusted SIGNERS.json</code> checks them and who signed)</span><table><tr><th>#</th><th class=\"name\">printed name</th><th class=\"name\">date and time of signing (UTC)</th><th class=\"name\">meaning</th><th class=\"name\">comment</th><th class=\"name\">key fingerprint</th></tr>",
        p.signatures.len()
    );
    for (k, s) in p.signatures.iter().enumerate() {
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=\"name\">{}</td><td class=\"name when\">{}</td><td class=\"name\">{}</td><td class=\"name\">{}</td><td class=\"name\"><code>{}</code></td></tr>",
            k + 1,
            esc(&s.signer),
            esc(&s.signed_at),
            esc(s.meaning.as_str()),
            esc(s.comment.as_deref().map(str::trim).unwrap_or_default()),
            esc(&s.key_fingerprint)
        );
    }
    h.push_str("</table></div>\n");
}

/// What the comparison is about, as entered: the standard fields first, in their order,
/// then any other; every standard field is printed, a blank one as "(not given)", so that a
/// missing entry shows on paper.
fn fields_section(h: &mut String, r: &Record) {
    match &r.protocol {
        Some(p) => {
            let _ = writeln!(
                h,
                "<p id=\"protocol\"><b>Protocol:</b> {}{} (SHA-256 <code>{}</code>). {}</p>",
                esc(&p.file),
                p.title
                    .as_ref()
                    .map(|t| format!(", “{}”", esc(t)))
                    .unwrap_or_default(),
                esc(&p.sha256),
                if p.deviations.is_empty() {
                    "Run as the protocol fixes it: no deviation."
                } else {
                    "Deviations from it:"
                }
            );
            protocol_signatures(h, p);
            if !p.deviations.is_empty() {
                h.push_str("<table id=\"deviations\"><tr><th class=\"name\">what</th><th class=\"name\">protocol</th><th class=\"name\">as run</th><th class=\"name\">reason</th></tr>");
                for d in &p.deviations {
                    let _ = write!(
                        h,
                        "<tr><td class=\"name\">{}</td><td class=\"name\">{}</td><td class=\"name\">{}</td><td class=\"name\">{}</td></tr>",
                        esc(&d.what),
                        esc(&d.protocol),
                        esc(&d.used),
                        esc(&d.reason)
                    );
                }
                h.push_str("</table>\n");
            }
        }
        None => h.push_str(
            "<p class=\"muted\" id=\"protocol\">No comparison protocol: the characteristics, alpha and margins were not fixed in a file before the run.</p>\n",
        ),
    }
    h.push_str("<table id=\"fields\">");
    let value = |name: &str| {
        r.fields
            .iter()
            .find(|f| f.name.eq_ignore_ascii_case(name))
            .map(|f| f.value.clone())
    };
    for name in super::STANDARD_FIELDS {
        let _ = write!(
            h,
            "<tr><th class=\"name\">{}</th><td class=\"name\">{}</td></tr>",
            esc(name),
            value(name).map_or_else(
                || "<span class=\"muted\">(not given)</span>".into(),
                |v| esc(&v)
            )
        );
    }
    for f in &r.fields {
        if !super::STANDARD_FIELDS
            .iter()
            .any(|n| n.eq_ignore_ascii_case(&f.name))
        {
            let _ = write!(
                h,
                "<tr><th class=\"name\">{}</th><td class=\"name\">{}</td></tr>",
                esc(&f.name),
                esc(&f.value)
            );
        }
    }
    h.push_str("</table>\n");
}

/// The runs the audit trail holds on these lots, the last one this record's; a record made on
/// the command line says it has none.
fn trail_section(h: &mut String, r: &Record) {
    let Some(a) = &r.audit_trail else {
        h.push_str("<p class=\"muted\" id=\"audit-trail\">No audit trail: the comparison was not made in the window.</p>\n");
        return;
    };
    let _ = writeln!(
        h,
        "<h2>Runs on these lots (audit trail)</h2><div class=\"muted\">{} runs in {}, the last one this record's (entry hash <code>{}</code>); <code>lotshift verify SUMMARY --trail FILE</code> checks them against the trail.</div><table id=\"audit-trail\"><tr><th>run</th><th class=\"name\">time (UTC)</th><th class=\"name\">characteristics</th><th>alpha</th><th class=\"name\">result</th></tr>",
        a.runs.len(),
        esc(&a.file),
        esc(&a.final_hash)
    );
    for run in &a.runs {
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=\"name when\">{}</td><td class=\"name\">{}</td><td>{}</td><td class=\"name\">{}</td></tr>",
            run.seq,
            esc(&run.at),
            esc(&run.characteristics.join(", ")),
            esc(&run
                .settings
                .get("alpha")
                .map(ToString::to_string)
                .unwrap_or_default()),
            esc(&run.headline)
        );
    }
    h.push_str("</table>\n");
}

/// Every setting the comparison ran with (the record's `settings`, key by key, so a setting
/// added later is printed too).
fn settings_section(h: &mut String, r: &Record) {
    h.push_str("<h2>Settings</h2><table id=\"settings\">");
    if let Ok(serde_json::Value::Object(m)) = serde_json::to_value(&r.settings) {
        for (k, v) in m {
            let shown = match &v {
                serde_json::Value::String(s) => s.clone(),
                other => other.to_string(),
            };
            let _ = write!(
                h,
                "<tr><th class=\"name\">{}</th><td class=\"name\">{}</td></tr>",
                esc(&k.replace('_', " ")),
                esc(&shown)
            );
        }
    }
    let _ = writeln!(
        h,
        "<tr><th class=\"name\">record schema</th><td class=\"name\">{}</td></tr></table>",
        esc(&r.schema)
    );
}

fn test_section(h: &mut String, r: &Record) {
    let t = &r.hotelling;
    let _ = writeln!(
        h,
        "<h2>Hotelling's two-sample T² test (alpha {})</h2><table><tr><th class=\"name\">T²</th><td>{}</td></tr><tr><th class=\"name\">F</th><td>{} on ({}, {}) df</td></tr><tr><th class=\"name\">p-value</th><td>{}</td></tr><tr><th class=\"name\">critical T²</th><td>{} (critical F {})</td></tr><tr><th class=\"name\">Mahalanobis D²</th><td>{}</td></tr></table>",
        r.alpha,
        format_sig(t.t2, 6),
        format_sig(t.f, 6),
        t.df1,
        t.df2,
        format_p(t.p_value),
        format_sig(t.critical_t2, 6),
        format_sig(t.critical_f, 6),
        format_sig(t.mahalanobis_d2, 6)
    );
    let d = &r.discriminant;
    let n = [
        r.lots.first().map_or(0, |l| l.n),
        r.lots.get(1).map_or(0, |l| l.n),
    ];
    // In floating point: a record that disagrees with itself may hold any counts.
    let total = (n[0] as f64 + n[1] as f64).max(1.0);
    h.push_str("<table id=\"discrimination\">");
    let _ = write!(
        h,
        "<tr><th class=\"name\">units compared</th><td class=\"name\">{} (reference) and {} (candidate)</td></tr>",
        n[0], n[1]
    );
    if let Some(a) = d.apparent_misclassified {
        let _ = write!(
            h,
            "<tr><th class=\"name\">misclassified by the discriminant rule</th><td class=\"name\">{} of the reference, {} of the candidate ({:.1}%)</td></tr>",
            a[0],
            a[1],
            100.0 * (a[0] as f64 + a[1] as f64) / total
        );
    }
    if let Some(l) = d.leave_one_out_misclassified {
        let _ = write!(
            h,
            "<tr><th class=\"name\">misclassified, each unit held out</th><td class=\"name\">{} of the reference, {} of the candidate ({:.1}%)</td></tr>",
            l[0],
            l[1],
            100.0 * d.leave_one_out_rate.unwrap_or(f64::NAN)
        );
    }
    let _ = writeln!(
        h,
        "<tr><th class=\"name\">condition number of the pooled correlation matrix</th><td class=\"name\">{}</td></tr></table>",
        format_sig(r.condition_number, 3)
    );
}

fn characteristics_section(h: &mut String, r: &Record) {
    h.push_str("<h2>Per characteristic</h2><table><tr><th class=\"name\">characteristic</th><th>mean ref.</th><th>SD ref.</th><th>mean cand.</th><th>SD cand.</th><th>cand. − ref.</th><th>std. difference</th><th>p (pooled t)</th><th>p (Welch)</th></tr>\n");
    for c in &r.per_characteristic {
        let unit = c
            .unit
            .as_deref()
            .map(|u| format!(" ({})", esc(u)))
            .unwrap_or_default();
        let decimals = finer_decimals(c.lots[0].decimals, c.lots[1].decimals);
        let _ = writeln!(
            h,
            "<tr><td class=\"name\">{}{unit}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&c.characteristic),
            format_measure(c.lots[0].mean, decimals),
            format_sig(c.lots[0].sd, 4),
            format_measure(c.lots[1].mean, decimals),
            format_sig(c.lots[1].sd, 4),
            format_sig(c.difference, 4),
            format_sig(c.standardized_difference, 3),
            format_p(c.pooled_p),
            format_p(c.welch_p)
        );
    }
    h.push_str("</table>\n");
}

fn intervals_table(h: &mut String, r: &Record) {
    h.push_str("<table><tr><th class=\"name\">characteristic</th><th>unit</th><th>cand. − ref.</th><th>simultaneous (T²)</th><th>Bonferroni</th><th>one at a time</th></tr>\n");
    for iv in &r.intervals {
        let unit = r
            .per_characteristic
            .iter()
            .find(|c| c.characteristic == iv.characteristic)
            .and_then(|c| c.unit.as_deref())
            .unwrap_or("");
        let cell = |x: [f64; 2], k: usize| {
            format!(
                "[{}, {}]{}",
                format_sig(x[0], 4),
                format_sig(x[1], 4),
                if iv.excludes_zero[k] {
                    " <b>excludes 0</b>"
                } else {
                    ""
                }
            )
        };
        let _ = writeln!(
            h,
            "<tr><td class=\"name\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&iv.characteristic),
            esc(unit),
            format_sig(iv.difference, 4),
            cell(iv.simultaneous, 0),
            cell(iv.bonferroni, 1),
            cell(iv.one_at_a_time, 2)
        );
    }
    h.push_str("</table>\n");
    if r.schema != super::SCHEMA_V1 {
        let conf = format_confidence(r.alpha);
        h.push_str("<ul class=\"readings\">");
        for (iv, c) in r.intervals.iter().zip(&r.per_characteristic) {
            let _ = write!(
                h,
                "<li>{}</li>",
                esc(&shift_sentence(
                    &iv.characteristic,
                    c.unit.as_deref(),
                    iv.difference,
                    iv.simultaneous,
                    finer_decimals(c.lots[0].decimals, c.lots[1].decimals),
                    &conf
                ))
            );
        }
        h.push_str("</ul>\n");
    }
}

fn ranking_table(h: &mut String, r: &Record) {
    h.push_str("<table><tr><th class=\"name\">characteristic</th><th>T² lost without it</th><th>weight / SD</th></tr>\n");
    for c in &r.ranking {
        let _ = writeln!(
            h,
            "<tr><td class=\"name\">{}</td><td>{}</td><td>{}</td></tr>",
            esc(&c.characteristic),
            format_sig(c.t2_drop, 4),
            format_sig(c.standardized_coefficient, 3)
        );
    }
    h.push_str("</table>\n");
}

/// Maps `[lo, hi]` onto `[a, b]` pixels.
fn scale(lo: f64, hi: f64, a: f64, b: f64) -> impl Fn(f64) -> f64 {
    move |v| a + (v - lo) / (hi - lo) * (b - a)
}

/// Which interval a line of the interval chart draws.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum IntervalType {
    Simultaneous,
    Bonferroni,
    OneAtATime,
}

/// How the interval chart draws each interval type, told apart in greyscale print: (type,
/// offset in the row, line width, colour, SVG dash pattern, empty for solid).
const INTERVAL_STROKES: [(IntervalType, f64, f64, &str, &str); 3] = [
    (IntervalType::Simultaneous, -7.0, 6.0, "#9a9acd", ""),
    (IntervalType::Bonferroni, 0.0, 3.5, "#505aaa", "9 3"),
    (IntervalType::OneAtATime, 7.0, 1.8, "#141e5a", "2 2"),
];

/// The intervals in pooled SD units: each characteristic's interval divided by its pooled
/// standard deviation, as the window's Intervals view draws them.
fn interval_chart(r: &Record) -> String {
    let ivs = &r.intervals;
    if ivs.is_empty() {
        return String::new();
    }
    // A record edited by hand may disagree with itself: missing SDs draw nothing.
    let sd: Vec<f64> = (0..ivs.len())
        .map(|k| {
            r.per_characteristic
                .get(k)
                .map_or(f64::NAN, |c| c.pooled_sd)
        })
        .collect();
    let mut lo: f64 = 0.0;
    let mut hi: f64 = 0.0;
    for (k, iv) in ivs.iter().enumerate() {
        for v in iv.simultaneous {
            lo = lo.min(v / sd[k]);
            hi = hi.max(v / sd[k]);
        }
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return String::new();
    }
    let pad = 0.05 * (hi - lo).max(1e-9);
    let (lo, hi) = (lo - pad, hi + pad);
    let (w, left, right) = (900.0, 170.0, 880.0);
    let row = 34.0;
    let height = 40.0 + row * ivs.len() as f64;
    let x = scale(lo, hi, left, right);
    let mut s = format!(
        "<div class=\"chart\"><h3>Chart: the three interval types per characteristic</h3><svg id=\"interval-chart\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{height}\" viewBox=\"0 0 {w} {height}\" font-size=\"12\">"
    );
    let _ = write!(
        s,
        "<line x1=\"{0}\" x2=\"{0}\" y1=\"8\" y2=\"{1}\" stroke=\"#888\" stroke-dasharray=\"4 3\"/>",
        x(0.0),
        height - 26.0
    );
    for (k, iv) in ivs.iter().enumerate() {
        let y = 22.0 + row * k as f64;
        let _ = write!(
            s,
            "<text x=\"{}\" y=\"{}\" text-anchor=\"end\">{}</text>",
            left - 8.0,
            y + 4.0,
            esc(&iv.characteristic)
        );
        // Told apart without colour too: by width, by dash pattern and by place in the row.
        for (which, dy, width, color, dash) in INTERVAL_STROKES {
            let v = match which {
                IntervalType::Simultaneous => iv.simultaneous,
                IntervalType::Bonferroni => iv.bonferroni,
                IntervalType::OneAtATime => iv.one_at_a_time,
            };
            let dash = if dash.is_empty() {
                String::new()
            } else {
                format!(" stroke-dasharray=\"{dash}\"")
            };
            let _ = write!(
                s,
                "<line x1=\"{:.1}\" x2=\"{:.1}\" y1=\"{2:.1}\" y2=\"{2:.1}\" stroke=\"{color}\" stroke-width=\"{width}\"{dash}/>",
                x(v[0] / sd[k]),
                x(v[1] / sd[k]),
                y + dy
            );
        }
        let _ = write!(
            s,
            "<circle cx=\"{:.1}\" cy=\"{y:.1}\" r=\"4\" fill=\"#c83c3c\"/>",
            x(iv.difference / sd[k])
        );
    }
    let _ = write!(
        s,
        "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">difference / pooled SD (thick solid: simultaneous, middle dashed: Bonferroni, thin dotted: one at a time; grey dashed: zero)</text><text x=\"{left}\" y=\"{}\" text-anchor=\"middle\">{}</text><text x=\"{right}\" y=\"{}\" text-anchor=\"middle\">{}</text></svg></div>",
        (left + right) / 2.0,
        height - 4.0,
        height - 18.0,
        format_sig(lo, 3),
        height - 18.0,
        format_sig(hi, 3)
    );
    s
}

/// The discriminant scores' histogram, as densities per lot (`ScoreHistogram::density`, as
/// the window's Direction view draws them).
fn score_chart(r: &Record) -> String {
    let Some(hgram) = r
        .discriminant
        .score_histogram
        .as_ref()
        .map(ScoreHistogram::from)
    else {
        return String::new();
    };
    if hgram.counts[0].is_empty() {
        return String::new();
    }
    let (start, width) = (hgram.start, hgram.width);
    let bins = hgram.counts[0].len();
    let dens: Vec<Vec<f64>> = (0..2)
        .map(|g| {
            (0..hgram.counts[g].len())
                .map(|b| hgram.density(g, b))
                .collect()
        })
        .collect();
    let top = dens.iter().flatten().fold(0.0_f64, |a, &b| a.max(b));
    let (w, h, left, right, bottom) = (900.0, 240.0, 40.0, 880.0, 205.0);
    let x = scale(start, start + width * bins as f64, left, right);
    let y = scale(0.0, top * 1.05, bottom, 12.0);
    let mut s = format!(
        "<div class=\"chart\"><h3>Chart: the discriminant scores of both lots</h3><svg id=\"score-chart\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" font-size=\"12\">"
    );
    for (g, style) in crate::palette::LOTS.iter().enumerate() {
        let color = style.hex;
        // Filled bars for the reference lot, outlines for the candidate (palette).
        let (opacity, stroke) = if style.filled {
            (0.45, 1.0)
        } else {
            (0.0, 1.6)
        };
        for (b, &d) in dens[g].iter().enumerate() {
            let x0 = x(start + width * b as f64);
            let x1 = x(start + width * (b + 1) as f64);
            let y0 = y(d);
            let _ = write!(
                s,
                "<rect x=\"{x0:.1}\" y=\"{y0:.1}\" width=\"{:.1}\" height=\"{:.1}\" fill=\"{color}\" fill-opacity=\"{opacity}\" stroke=\"{color}\" stroke-width=\"{stroke}\"/>",
                (x1 - x0).max(0.5),
                (bottom - y0).max(0.0)
            );
        }
    }
    let _ = write!(
        s,
        "<line x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"8\" y2=\"{bottom}\" stroke=\"#333\" stroke-dasharray=\"4 3\"/><line x1=\"{left}\" x2=\"{right}\" y1=\"{bottom}\" y2=\"{bottom}\" stroke=\"#333\"/><text x=\"{1}\" y=\"{2}\" text-anchor=\"middle\">discriminant score, higher toward the candidate (filled indigo: reference, amber outline: candidate; dashed: allocation cut-off)</text></svg></div>",
        x(0.0),
        (left + right) / 2.0,
        h - 12.0
    );
    s
}

/// True when every matrix and vector `pair_geometry` reads holds characteristics `i` and `j`,
/// and the lot sizes add up (a record edited by hand may disagree with itself: then no pair
/// chart is drawn).
fn pair_fits(c: &crate::analysis::Comparison, i: usize, j: usize) -> bool {
    let k = i.max(j);
    let square = |m: &Vec<Vec<f64>>| m.len() > k && m.iter().all(|row| row.len() > k);
    c.lots
        .iter()
        .all(|l| l.mean.len() > k && square(&l.covariance))
        && square(&c.pooled_covariance)
        && c.intervals.len() > k
        && c.lots[0].n.checked_add(c.lots[1].n).is_some()
}

/// The two characteristics that drive the shift most: each lot's mean region and data ellipse
/// from `analysis::pair_geometry`, as the window's Pairs view draws them at its default
/// coverage.
fn pair_chart(r: &Record) -> String {
    let names = &r.characteristics;
    let ranking = &r.ranking;
    if names.len() < 2 || ranking.len() < 2 {
        return String::new();
    }
    let (Some(i), Some(j)) = (
        names.iter().position(|n| *n == ranking[0].characteristic),
        names.iter().position(|n| *n == ranking[1].characteristic),
    ) else {
        return String::new();
    };
    let alpha = r.alpha;
    let Some(c) = r.comparison() else {
        return String::new();
    };
    if !pair_fits(&c, i, j) {
        return String::new();
    }
    let geometry = pair_geometry(&c, i, j, DATA_COVERAGE);
    let mut shapes: Vec<(usize, &Vec<[f64; 2]>, bool)> = Vec::new();
    for g in 0..2 {
        if let Some(o) = &geometry.mean_regions[g] {
            shapes.push((g, o, false));
        }
        if let Some(o) = &geometry.data_ellipses[g] {
            shapes.push((g, o, true));
        }
    }
    let means = geometry.means;
    let pts = shapes.iter().flat_map(|s| s.1.iter());
    let (mut x0, mut x1, mut y0, mut y1) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    for p in pts {
        x0 = x0.min(p[0]);
        x1 = x1.max(p[0]);
        y0 = y0.min(p[1]);
        y1 = y1.max(p[1]);
    }
    if !(x1 > x0 && y1 > y0) {
        return String::new();
    }
    let (w, h) = (560.0, 460.0);
    let x = scale(x0, x1, 70.0, w - 20.0);
    let y = scale(y0, y1, h - 60.0, 15.0);
    let mut s = format!(
        "<div class=\"chart\"><h2>The pair that separates the lots most: {} and {}</h2><svg id=\"pair-chart\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" font-size=\"12\">",
        esc(&names[i]),
        esc(&names[j])
    );
    for (g, o, dashed) in &shapes {
        let color = crate::palette::LOTS[*g].hex;
        let d: Vec<String> = o
            .iter()
            .map(|p| format!("{:.1},{:.1}", x(p[0]), y(p[1])))
            .collect();
        let _ = write!(
            s,
            "<polyline points=\"{}\" fill=\"none\" stroke=\"{color}\" stroke-width=\"{}\"{}/>",
            d.join(" "),
            if *dashed { 1.2 } else { 2.2 },
            if *dashed {
                " stroke-dasharray=\"5 4\""
            } else {
                ""
            }
        );
    }
    for (g, m) in means.iter().enumerate() {
        let style = crate::palette::LOTS[g];
        let color = style.hex;
        let fill = if style.filled { color } else { "#ffffff" };
        let _ = write!(
            s,
            "<circle cx=\"{:.1}\" cy=\"{:.1}\" r=\"4.5\" fill=\"{fill}\" stroke=\"{color}\" stroke-width=\"2\"/>",
            x(m[0]),
            y(m[1])
        );
    }
    let _ = write!(
        s,
        "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">{} ({} to {})</text><text x=\"14\" y=\"{}\" transform=\"rotate(-90 14 {})\" text-anchor=\"middle\">{} ({} to {})</text></svg><div class=\"muted\">Solid: each lot's {}% confidence ellipse for its mean (this pair alone). Dashed: normal-theory data ellipses holding {}% of a lot's units. Indigo with a filled mean: reference; amber with a hollow mean: candidate.</div></div>",
        w / 2.0,
        h - 30.0,
        esc(&names[i]),
        format_sig(x0, 5),
        format_sig(x1, 5),
        h / 2.0,
        h / 2.0,
        esc(&names[j]),
        format_sig(y0, 5),
        format_sig(y1, 5),
        format_confidence(alpha),
        format_confidence(1.0 - DATA_COVERAGE)
    );
    s
}

fn checks_section(h: &mut String, r: &Record) {
    let f = &r.favoured;
    if r.box_m.is_none() && r.mardia.is_empty() && r.permutation.is_none() {
        return;
    }
    let _ = writeln!(
        h,
        "<h2>Assumption checks</h2><p><b>Favoured: {}</b> ({}) — {}</p><table>",
        esc(FavouredTest::from(f.test).name()),
        p_text(f.p_value),
        esc(&f.why)
    );
    // The same one-line forms as the text output, from the record's own numbers.
    use crate::report::{box_m_line, mardia_line, permutation_line, unequal_line};
    let row = |h: &mut String, name: &str, text: String| {
        let _ = writeln!(
            h,
            "<tr><th class=\"name\">{}</th><td class=\"name\">{}</td></tr>",
            esc(name),
            esc(&text)
        );
    };
    if let Some(b) = &r.box_m {
        row(h, "Box's M", box_m_line(&b.into()));
    }
    if let Some(u) = &r.unequal_covariance {
        row(
            h,
            "Unequal covariances (Krishnamoorthy–Yu)",
            unequal_line(&u.into()),
        );
    }
    if let Some(p) = &r.permutation {
        row(h, "Permutation p-value", permutation_line(&p.into()));
    }
    for m in &r.mardia {
        row(h, &format!("Mardia, {}", m.lot), mardia_line(&m.into()));
    }
    for n in &r.normality {
        let n: crate::analysis::NormalityRow = n.into();
        for g in 0..2 {
            let lot = r.lots.get(g).map_or("", |l| l.name.as_str());
            if let Some(w) = &n.lots[g] {
                row(
                    h,
                    &format!("Shapiro–Wilk, {} in {lot}", n.characteristic),
                    format!("W = {}, {}", format_sig(w.w, 4), p_text(w.p_value)),
                );
            } else if let Some(l) = &n.large[g] {
                row(
                    h,
                    &format!("Normality, {} in {lot}", n.characteristic),
                    format!(
                        "skewness {}, excess kurtosis {}; Anderson–Darling A* = {}, {}; K² = {}, {}",
                        format_sig(l.skewness, 3),
                        format_sig(l.excess_kurtosis, 3),
                        format_sig(l.anderson_darling_modified, 4),
                        p_text(l.anderson_darling_p),
                        format_sig(l.k2, 4),
                        p_text(l.k2_p)
                    ),
                );
            }
        }
    }
    if let Some(w) = &r.without_outliers {
        row(
            h,
            "Without the flagged outliers",
            format!(
                "T² = {}, {}: the decision {}",
                format_sig(w.t2, 5),
                p_text(w.p_value),
                if w.same_decision { "holds" } else { "changes" }
            ),
        );
    }
    if let Some(d) = &r.detectable {
        row(
            h,
            "Detectable shift",
            format!(
                "Mahalanobis distance {} with power {} at these lot sizes",
                format_sig(d.distance, 3),
                d.power
            ),
        );
    }
    if let Some(units) = r.outliers.as_ref().map(|o| &o.units) {
        let _ = writeln!(
            h,
            "<tr><th class=\"name\">Outliers</th><td class=\"name\">{} unit(s) flagged{}</td></tr>",
            units.len(),
            if units.is_empty() {
                String::new()
            } else {
                let list: Vec<String> = units
                    .iter()
                    .take(20)
                    .map(|u| {
                        let labels: Vec<String> = u
                            .labels
                            .iter()
                            .map(|(header, value)| format!("{header} {value}"))
                            .collect();
                        format!(
                            "lot {}, row {}: {}",
                            u.lot + 1,
                            // As the record writes a row it does not know.
                            u.row
                                .map_or_else(|| "null".to_string(), |row| row.to_string()),
                            labels.join(", ")
                        )
                    })
                    .collect();
                format!(": {}", esc(&list.join("; ")))
            }
        );
    }
    h.push_str("</table>\n");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::{LotData, Settings, Silent, compare};
    use nalgebra::DMatrix;

    /// A record of two small lots of three characteristics, with every check.
    fn record(names: [&str; 2]) -> Record {
        let a = DMatrix::from_row_slice(
            7,
            3,
            &[
                10.2, 20.1, 5.0, 9.8, 19.7, 5.3, 10.5, 20.6, 4.8, 10.1, 20.0, 5.1, 9.6, 19.9, 5.6,
                10.3, 20.4, 4.9, 10.0, 20.2, 5.2,
            ],
        );
        let b = DMatrix::from_row_slice(
            6,
            3,
            &[
                10.6, 20.2, 5.1, 10.9, 20.8, 4.7, 10.4, 19.9, 5.5, 11.0, 20.5, 5.0, 10.7, 20.6,
                5.2, 10.5, 20.3, 4.6,
            ],
        );
        let characteristics = ["x", "y", "z"].map(String::from).to_vec();
        let c = compare(
            &characteristics,
            &[None, None, None],
            [
                LotData {
                    name: names[0],
                    data: &a,
                },
                LotData {
                    name: names[1],
                    data: &b,
                },
            ],
            &Settings {
                permutations: 99,
                ..Settings::default()
            },
            &Silent,
        )
        .unwrap();
        Record::new(&c, None)
    }

    #[test]
    fn names_are_escaped() {
        let mut r = record(["<script>", "b&c"]);
        r.verdict = "x < y".into();
        let html = render_html(&r, None);
        assert!(!html.contains("<script>"));
        assert!(html.contains("&lt;script&gt;"));
        assert!(html.contains("b&amp;c"));
        assert!(html.contains("x &lt; y"));
    }

    /// The pair chart draws the analysis's geometry: its ellipses' points, in the chart's
    /// order (each lot's mean region, then its data ellipse at the window's coverage).
    #[test]
    fn the_pair_chart_draws_the_analysis_geometry() {
        let r = record(["ref", "cand"]);
        let html = render_html(&r, None);
        let c = r.comparison().unwrap();
        let name = |k: usize| &r.ranking[k].characteristic;
        let i = r.characteristics.iter().position(|n| n == name(0)).unwrap();
        let j = r.characteristics.iter().position(|n| n == name(1)).unwrap();
        let g = pair_geometry(&c, i, j, DATA_COVERAGE);
        let polylines: Vec<usize> = html
            .split("<polyline points=\"")
            .skip(1)
            .map(|p| p.split('"').next().unwrap().split(' ').count())
            .collect();
        let want: Vec<usize> = (0..2)
            .flat_map(|k| [&g.mean_regions[k], &g.data_ellipses[k]])
            .map(|o| o.as_ref().unwrap().len())
            .collect();
        assert_eq!(polylines, want);
        // A record whose matrices do not hold the pair draws no pair chart, and no panic.
        let mut broken = r.clone();
        broken.pooled_covariance.truncate(1);
        let html = render_html(&broken, None);
        assert!(!html.contains("pair-chart"));
        assert!(html.contains("interval-chart"));
    }

    /// The signature block shows the manifestation from the typed signature.
    #[test]
    fn the_signature_block_is_shown() {
        let r = record(["ref", "cand"]);
        let key = ed25519_dalek::SigningKey::from_bytes(&[3u8; 32]);
        let s = super::super::sign::sign(
            &r,
            &key,
            "A. <Engineer>",
            super::super::sign::Meaning::Approval,
            "2026-12-02T03:30:00Z",
        )
        .unwrap();
        let html = render_html_signed(&r, &s.signatures);
        assert!(html.contains("Signed by: <b>A. &lt;Engineer&gt;</b>"));
        assert!(html.contains("Meaning of the signature: <b>approval</b>"));
        assert!(html.contains(&s.signatures[0].key_fingerprint));
        assert!(render_html(&r, None).contains("Not signed."));
    }

    /// Every chart is one block that cannot break across pages and opens with its heading, so
    /// a printed chart is on the page of its heading.
    #[test]
    fn every_chart_keeps_its_heading_on_its_page() {
        let html = render_html(&record(["ref", "cand"]), None);
        let blocks: Vec<&str> = html.split("<div class=\"chart\">").skip(1).collect();
        assert!(blocks.len() >= 3, "{} chart blocks", blocks.len());
        for b in &blocks {
            assert!(
                b.starts_with("<h2>") || b.starts_with("<h3>"),
                "a chart without its heading: {}",
                &b[..b.len().min(80)]
            );
        }
        assert!(STYLE.contains(".chart, .keep { break-inside: avoid; page-break-inside: avoid; }"));
        assert!(STYLE.contains(".chart h2, .chart h3 { break-after: avoid;"));
    }

    /// In the interval chart the three interval types differ by line width and dash pattern,
    /// not only by colour: each row draws three lines, no two with the same width and dashes.
    #[test]
    fn interval_types_are_told_apart_without_colour() {
        let r = record(["ref", "cand"]);
        let html = render_html(&r, None);
        let chart = html
            .split("<svg id=\"interval-chart\"")
            .nth(1)
            .unwrap()
            .split("</svg>")
            .next()
            .unwrap();
        let attr = |line: &str, name: &str| {
            line.split(&format!(" {name}=\""))
                .nth(1)
                .map(|v| v.split('"').next().unwrap().to_string())
                .unwrap_or_default()
        };
        let styles: Vec<(String, String)> = chart
            .split("<line ")
            .skip(1)
            .filter(|l| l.contains("stroke-width"))
            .map(|l| (attr(l, "stroke-width"), attr(l, "stroke-dasharray")))
            .collect();
        assert_eq!(styles.len(), 3 * r.intervals.len());
        for row in styles.chunks(3) {
            for a in 0..3 {
                for b in a + 1..3 {
                    assert_ne!(row[a].0, row[b].0, "{row:?}");
                    assert_ne!(row[a].1, row[b].1, "{row:?}");
                }
            }
        }
    }

    /// A protocol's signatures are printed with each one's manifestation; an unsigned
    /// protocol is said to be so.
    #[test]
    fn the_protocol_and_its_signatures_are_shown() {
        let mut r = record(["ref", "cand"]);
        let sha = "ab".repeat(32);
        let section = |signatures| super::super::ProtocolRecord {
            file: "plan.json".into(),
            sha256: sha.clone(),
            title: Some("a plan".into()),
            deviations: Vec::new(),
            signatures,
        };
        r.protocol = Some(section(Vec::new()));
        let html = render_html(&r, None);
        assert!(html.contains(&sha));
        assert!(html.contains("<b>The protocol is not signed:</b>"));
        let m = super::super::sign::Manifestation {
            signer: "P. <Planner>".into(),
            signed_at: "2026-12-01T08:00:00Z".into(),
            meaning: super::super::sign::Meaning::Approval,
            comment: "plan approved".into(),
        };
        let key = ed25519_dalek::SigningKey::from_bytes(&[5u8; 32]);
        let signed = super::super::protocol_sign::add(&sha, &[], &key, &m).unwrap();
        r.protocol = Some(section(signed.signatures.clone()));
        let html = render_html(&r, None);
        assert!(!html.contains("The protocol is not signed"));
        for want in [
            "P. &lt;Planner&gt;",
            "2026-12-01T08:00:00Z",
            "<td class=\"name\">approval</td>",
            "plan approved",
            signed.signatures[0].key_fingerprint.as_str(),
        ] {
            assert!(html.contains(want), "{want}");
        }
    }
}
