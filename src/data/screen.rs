//! Screening the inputs for mistakes that would change a lot decision without a word: the
//! same file given for both lots, serial numbers that repeat, and integer code columns
//! (cavity, nest, fixture numbers) compared as if they were measurements.

use std::collections::HashMap;

use super::{ColumnData, Lot, Prepared, match_key};

/// Lots whose files are byte for byte the same (and not two lots split out of one file).
pub fn same_file(a: &Lot, b: &Lot) -> Option<String> {
    let (pa, pb) = (&a.provenance, &b.provenance);
    (pa.sha256 == pb.sha256 && pa.split.is_none() && pb.split.is_none()).then(|| {
        format!(
            "Both lots are the same file (\"{}\" and \"{}\" have the same SHA-256), so the \
             comparison says nothing about a change: check that the right files were given.",
            pa.file_name, pb.file_name
        )
    })
}

/// A text column whose values look like identifiers: no spaces, a digit in each, and at least
/// 90% distinct within the lot (common practice for serial numbers; a timestamp or an
/// operator's name does not qualify).
fn identifier_like(values: &[&str]) -> bool {
    let filled: Vec<&str> = values
        .iter()
        .copied()
        .filter(|v| !v.trim().is_empty())
        .collect();
    if filled.len() < 5 {
        return false;
    }
    let shaped = filled
        .iter()
        .all(|v| !v.chars().any(char::is_whitespace) && v.chars().any(|c| c.is_ascii_digit()));
    let mut distinct: Vec<&str> = filled.clone();
    distinct.sort_unstable();
    distinct.dedup();
    shaped && distinct.len() * 10 >= filled.len() * 9
}

fn text_values(lot: &Lot, k: usize) -> Vec<&str> {
    match &lot.columns[k].data {
        ColumnData::Text(t) => (0..t.len()).map(|i| t.get(i)).collect(),
        ColumnData::Numeric(_) => Vec::new(),
    }
}

/// Shows at most three examples, then how many more.
fn examples(items: &[String]) -> String {
    let shown: Vec<&str> = items.iter().take(3).map(String::as_str).collect();
    let more = items.len().saturating_sub(3);
    if more > 0 {
        format!("{} and {more} more", shown.join(", "))
    } else {
        shown.join(", ")
    }
}

/// Identifier columns (serial numbers) with a value that repeats within a lot, or (with
/// `across`) that appears in both lots: each a warning naming the column and the values with their rows.
pub fn repeated_identifiers(lots: [&Lot; 2], across: bool) -> Vec<String> {
    let mut out = Vec::new();
    let mut ids: [Vec<(String, usize)>; 2] = [Vec::new(), Vec::new()];
    for (g, lot) in lots.iter().enumerate() {
        for (k, col) in lot.columns.iter().enumerate() {
            let values = text_values(lot, k);
            if identifier_like(&values) {
                ids[g].push((match_key(&col.name), k));
                let mut seen: HashMap<&str, u32> = HashMap::new();
                let mut repeats = Vec::new();
                for (i, v) in values.iter().enumerate() {
                    if v.trim().is_empty() {
                        continue;
                    }
                    match seen.get(v) {
                        Some(first) => {
                            repeats.push(format!("\"{v}\" on rows {first} and {}", lot.rows[i]))
                        }
                        None => {
                            seen.insert(v, lot.rows[i]);
                        }
                    }
                }
                if !repeats.is_empty() {
                    out.push(format!(
                        "serial numbers repeat within lot \"{}\" (column \"{}\"): {}; a unit \
                         measured twice counts twice",
                        lot.name,
                        col.header,
                        examples(&repeats)
                    ));
                }
            }
        }
    }
    if !across {
        return out;
    }
    for (key, ka) in &ids[0] {
        let Some(&(_, kb)) = ids[1].iter().find(|(kb_key, _)| kb_key == key) else {
            continue;
        };
        let (a, b) = (lots[0], lots[1]);
        let in_b: HashMap<&str, u32> = text_values(b, kb)
            .into_iter()
            .enumerate()
            .filter(|(_, v)| !v.trim().is_empty())
            .map(|(i, v)| (v, b.rows[i]))
            .collect();
        let both: Vec<String> = text_values(a, *ka)
            .into_iter()
            .enumerate()
            .filter_map(|(i, v)| {
                in_b.get(v).map(|rb| {
                    format!(
                        "\"{v}\" (row {} of \"{}\", row {rb} of \"{}\")",
                        a.rows[i], a.name, b.name
                    )
                })
            })
            .collect();
        if !both.is_empty() {
            out.push(format!(
                "serial numbers appear in both lots (column \"{}\"): {}; the same unit in both \
                 lots makes them look alike",
                a.columns[*ka].header,
                examples(&both)
            ));
        }
    }
    out
}

/// Largest number of distinct values for an integer column to look like a code.
const CODE_LEVELS: usize = 12;

/// Compared characteristics whose values are all integers with only a few distinct values
/// (a cavity, nest or fixture number): each a warning offering to read it as a label.
pub fn code_like(prepared: &Prepared) -> Vec<String> {
    let mut out = Vec::new();
    for (k, name) in prepared.characteristics.iter().enumerate() {
        let mut levels: Vec<i64> = Vec::new();
        let mut n = 0usize;
        let mut integral = true;
        'lots: for lot in &prepared.lots {
            for &v in lot.data.column(k).iter() {
                n += 1;
                if v.fract() != 0.0 || v.abs() > 1e15 {
                    integral = false;
                    break 'lots;
                }
                let v = v as i64;
                if !levels.contains(&v) {
                    levels.push(v);
                    if levels.len() > CODE_LEVELS {
                        integral = false;
                        break 'lots;
                    }
                }
            }
        }
        if integral && n >= 3 * levels.len() {
            levels.sort_unstable();
            out.push(format!(
                "\"{name}\" holds only the whole numbers {}: if it numbers cavities, nests or \
                 fixtures it is a code, not a measurement; read it as a label (--labels \"{name}\", \
                 or untick it in the window)",
                levels
                    .iter()
                    .map(i64::to_string)
                    .collect::<Vec<_>>()
                    .join(", ")
            ));
        }
    }
    out
}
