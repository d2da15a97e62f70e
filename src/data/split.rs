//! One file holding both lots, split by a lot column.

use super::{Column, LoadError, LoadErrorKind, Lot, match_key};

/// Distinct non-empty values of the lot column, in order of first appearance.
///
/// # Errors
/// The column does not exist.
pub fn lot_values(lot: &Lot, column: &str) -> Result<Vec<String>, LoadError> {
    let col = find(lot, column)?;
    let mut seen: Vec<String> = Vec::new();
    for i in 0..lot.len() {
        let v = col.text(i);
        if !v.is_empty() && !seen.contains(&v) {
            seen.push(v);
        }
    }
    Ok(seen)
}

/// Columns that can tell two lots apart in one file, with their distinct values (2 to 50 of
/// them), those whose name says it holds lots (lot, route, batch...) first. Numeric columns
/// count too (lot codes 1, 2...).
pub fn lot_column_candidates(table: &Lot) -> Vec<(String, Vec<String>)> {
    let mut candidates = Vec::new();
    for c in &table.columns {
        let mut values: Vec<String> = Vec::new();
        for i in 0..table.len() {
            let v = c.text(i);
            if !v.is_empty() && !values.contains(&v) {
                values.push(v);
                if values.len() > 50 {
                    break;
                }
            }
        }
        if (2..=50).contains(&values.len()) {
            candidates.push((c.header.clone(), values));
        }
    }
    let hint = ["lot", "route", "batch", "group", "site", "line", "supplier"];
    candidates.sort_by_key(|(name, _)| {
        let n = name.to_lowercase();
        !hint.iter().any(|h| n.contains(h))
    });
    candidates
}

fn find<'a>(lot: &'a Lot, column: &str) -> Result<&'a Column, LoadError> {
    lot.column(column).ok_or_else(|| LoadError {
        column: Some(column.to_string()),
        ..LoadError::new(
            &lot.provenance.path,
            LoadErrorKind::NoLotColumn {
                available: lot.columns.iter().map(|c| c.header.clone()).collect(),
            },
        )
    })
}

/// Splits a file's table into two lots by the values of `column`.
///
/// With `wanted` absent the column must hold exactly two values (first seen is the first lot);
/// otherwise the two named values are taken in the order given.
///
/// # Errors
/// No such column, a single value, more than two values with none chosen, or a chosen value
/// that does not occur.
pub fn split_lot(
    lot: &Lot,
    column: &str,
    wanted: Option<[&str; 2]>,
) -> Result<[Lot; 2], LoadError> {
    let col = find(lot, column)?;
    let values = lot_values(lot, column)?;
    let err = |why: String| LoadError {
        column: Some(col.header.clone()),
        position: Some(col.position),
        ..LoadError::new(
            &lot.provenance.path,
            LoadErrorKind::LotValues {
                why,
                values: values.clone(),
            },
        )
    };
    let chosen: [String; 2] = match wanted {
        Some(w) => {
            let mut out = [String::new(), String::new()];
            for (slot, name) in out.iter_mut().zip(w) {
                let Some(v) = values.iter().find(|v| match_key(v) == match_key(name)) else {
                    return Err(err(format!("the lot column has no value \"{name}\"")));
                };
                *slot = v.clone();
            }
            if out[0] == out[1] {
                return Err(err("the two lots chosen are the same".into()));
            }
            out
        }
        None => match values.as_slice() {
            [a, b] => [a.clone(), b.clone()],
            [] => return Err(err("the lot column is empty".into())),
            [_] => return Err(err("the lot column holds only one lot".into())),
            _ => {
                return Err(err(
                    "the lot column holds more than two lots; choose two (--lot-values A,B)".into(),
                ));
            }
        },
    };
    let key = col.position;
    let pick = |value: &str| -> Lot {
        let idx: Vec<usize> = (0..lot.len()).filter(|&i| col.text(i) == value).collect();
        let mut one = lot.select_units(&idx);
        one.columns.retain(|c| c.position != key);
        one.name = value.to_string();
        one.provenance.split = Some((col.header.clone(), value.to_string()));
        one.provenance.rows_read = idx.len();
        one
    };
    Ok([pick(&chosen[0]), pick(&chosen[1])])
}
