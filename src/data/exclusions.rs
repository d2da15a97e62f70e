//! Units set aside with a recorded reason: a damaged part, a gauge error, a unit measured
//! under the wrong program. The lot files stay untouched; the exclusions, each with its row,
//! labels and reason, go into the record and the signature.
//!
//! An exclusion file is a table (CSV, TSV or spreadsheet) with a `lot` column (`reference` or
//! `candidate`, `1` or `2`, or the lot's name), a `reason` column, and either a `row` column
//! (the row as a spreadsheet shows the lot file) or a column named like one of the lot's label
//! columns (`serial`, say) holding the unit's value there.

use std::path::Path;

use super::error::{LoadError, LoadErrorKind};
use super::{ColumnData, LoadOptions, Lot, load, match_key};

/// A unit set aside, located in its lot file.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Exclusion {
    /// Lot: 0 reference, 1 candidate.
    pub lot: usize,
    /// Row of the lot file, as a spreadsheet shows it.
    pub row: u32,
    /// The unit's labels, `[header, value]`.
    pub labels: Vec<(String, String)>,
    /// Why it is set aside.
    pub reason: String,
}

/// One line of an exclusion file, before it is found in the lots.
#[derive(Debug, Clone, PartialEq)]
struct Wanted {
    lot: usize,
    by: By,
    reason: String,
    line: usize,
}

#[derive(Debug, Clone, PartialEq)]
enum By {
    Row(u32),
    Label { column: String, value: String },
}

fn invalid(path: &str, line: usize, header: &str, pos: usize, why: String) -> LoadError {
    LoadError::at_cell(path, line, header, pos, LoadErrorKind::Invalid(why))
}

/// Reads an exclusion file and finds each unit in the lots.
///
/// # Errors
/// The loaders' errors, and for the content a [`LoadError`] naming the file, row and column:
/// no `lot` or `reason` column, no way to find the unit, an unknown lot, a blank reason, a row
/// or label value not in the lot, a label value that names more than one unit, the same unit
/// twice.
pub fn load_exclusions(path: &Path, lots: [&Lot; 2]) -> Result<Vec<Exclusion>, LoadError> {
    let table = load(
        path,
        &LoadOptions {
            sheet: None,
            // Read as any table: `row` as a number, `lot`, `reason` and label values as their
            // cells' text (a numeric-looking serial is matched by its written form).
            labels: Vec::new(),
        },
    )?;
    exclusions_from_table(&table, lots)
}

/// As [`load_exclusions`], from a table already read.
///
/// # Errors
/// As [`load_exclusions`].
pub fn exclusions_from_table(table: &Lot, lots: [&Lot; 2]) -> Result<Vec<Exclusion>, LoadError> {
    let file = table.provenance.path.clone();
    let find = |name: &str| {
        table
            .columns
            .iter()
            .find(|c| match_key(&c.name) == match_key(name))
    };
    let need = |name: &str| {
        find(name).ok_or_else(|| {
            LoadError::at_row(
                &file,
                1,
                LoadErrorKind::Invalid(format!(
                    "an exclusion file needs a \"{name}\" column (and \"row\" or a label column \
                     such as the serial number to find each unit)"
                )),
            )
        })
    };
    let lot_col = need("lot")?;
    let reason_col = need("reason")?;
    let row_col = find("row");
    // Label columns of the lot files that the table also has.
    let label_cols: Vec<&super::Column> = table
        .columns
        .iter()
        .filter(|c| {
            !["lot", "reason", "row"]
                .iter()
                .any(|k| match_key(k) == match_key(&c.name))
                && lots.iter().any(|l| {
                    l.columns
                        .iter()
                        .any(|lc| !lc.is_numeric() && match_key(&lc.name) == match_key(&c.name))
                })
        })
        .collect();
    if row_col.is_none() && label_cols.is_empty() {
        return Err(LoadError::at_row(
            &file,
            1,
            LoadErrorKind::Invalid(
                "an exclusion file needs a \"row\" column or a column named like a label column \
                 of the lot files (such as the serial number) to find each unit"
                    .into(),
            ),
        ));
    }
    let mut wanted = Vec::new();
    for i in 0..table.len() {
        let line = table.rows[i] as usize;
        let lot_text = lot_col.text(i);
        let lot_text = lot_text.trim();
        let lot = match lot_text.to_lowercase().as_str() {
            "reference" | "ref" | "1" => Some(0),
            "candidate" | "cand" | "2" => Some(1),
            t => lots.iter().position(|l| l.name.to_lowercase() == t),
        }
        .ok_or_else(|| {
            invalid(
                &file,
                line,
                &lot_col.header,
                lot_col.position,
                format!(
                    "\"{lot_text}\" is not a lot: write reference or candidate (or 1, 2, or the \
                     lot's name)"
                ),
            )
        })?;
        let reason = reason_col.text(i).trim().to_string();
        if reason.is_empty() {
            return Err(invalid(
                &file,
                line,
                &reason_col.header,
                reason_col.position,
                "every unit set aside needs its reason".into(),
            ));
        }
        let by = match row_col.map(|c| (c, c.text(i))) {
            Some((c, t)) if !t.trim().is_empty() => {
                let r: u32 = t.trim().parse().map_err(|_| {
                    invalid(
                        &file,
                        line,
                        &c.header,
                        c.position,
                        format!("\"{}\" is not a row number", t.trim()),
                    )
                })?;
                By::Row(r)
            }
            _ => {
                let Some((c, v)) = label_cols
                    .iter()
                    .map(|c| (c, c.text(i)))
                    .find(|(_, v)| !v.trim().is_empty())
                else {
                    return Err(LoadError::at_row(
                        &file,
                        line,
                        LoadErrorKind::Invalid(
                            "no row and no label value to find the unit by".into(),
                        ),
                    ));
                };
                By::Label {
                    column: c.name.clone(),
                    value: v.trim().to_string(),
                }
            }
        };
        wanted.push(Wanted {
            lot,
            by,
            reason,
            line,
        });
    }
    let mut out: Vec<Exclusion> = Vec::new();
    for w in wanted {
        let lot = lots[w.lot];
        let here = |why: String| LoadError::at_row(&file, w.line, LoadErrorKind::Invalid(why));
        let index = match &w.by {
            By::Row(r) => lot.rows.iter().position(|x| x == r).ok_or_else(|| {
                here(format!(
                    "row {r} is not a unit of lot \"{}\" ({})",
                    lot.name, lot.provenance.file_name
                ))
            })?,
            By::Label { column, value } => {
                let col = lot
                    .columns
                    .iter()
                    .find(|c| !c.is_numeric() && match_key(&c.name) == match_key(column))
                    .ok_or_else(|| {
                        here(format!(
                            "lot \"{}\" has no label column \"{column}\"",
                            lot.name
                        ))
                    })?;
                let hits: Vec<usize> = (0..lot.len())
                    .filter(|&i| col.text(i).trim() == value)
                    .collect();
                match hits.as_slice() {
                    [one] => *one,
                    [] => {
                        return Err(here(format!(
                            "no unit of lot \"{}\" has {column} \"{value}\"",
                            lot.name
                        )));
                    }
                    many => {
                        return Err(here(format!(
                            "{} units of lot \"{}\" have {column} \"{value}\" (rows {}): give the \
                             row instead",
                            many.len(),
                            lot.name,
                            many.iter()
                                .map(|&i| lot.rows[i].to_string())
                                .collect::<Vec<_>>()
                                .join(", ")
                        )));
                    }
                }
            }
        };
        let row = lot.rows[index];
        if out.iter().any(|e| e.lot == w.lot && e.row == row) {
            return Err(here(format!(
                "row {row} of lot \"{}\" is set aside twice",
                lot.name
            )));
        }
        out.push(Exclusion {
            lot: w.lot,
            row,
            labels: labels_of(lot, index),
            reason: w.reason,
        });
    }
    Ok(out)
}

/// The unit's label columns as `[header, value]`.
pub fn labels_of(lot: &Lot, index: usize) -> Vec<(String, String)> {
    lot.columns
        .iter()
        .filter_map(|c| match &c.data {
            ColumnData::Text(t) => Some((c.header.clone(), t.get(index).to_string())),
            ColumnData::Numeric(_) => None,
        })
        .collect()
}

/// The lots without the units set aside (the lots as read are left as they are).
///
/// # Errors
/// An exclusion whose row is not a unit of its lot (a record replayed against other files).
pub fn apply(lots: [&Lot; 2], exclusions: &[Exclusion]) -> Result<[Lot; 2], String> {
    let keep = kept_units(lots, exclusions)?;
    Ok([
        lots[0].select_units(&keep[0]),
        lots[1].select_units(&keep[1]),
    ])
}

/// For each lot, the indices (in the lot as read) of the units not set aside.
///
/// # Errors
/// As [`apply`].
pub fn kept_units(lots: [&Lot; 2], exclusions: &[Exclusion]) -> Result<[Vec<usize>; 2], String> {
    let mut out: [Vec<usize>; 2] = [Vec::new(), Vec::new()];
    for (g, lot) in lots.iter().enumerate() {
        let gone: std::collections::HashSet<u32> = exclusions
            .iter()
            .filter(|e| e.lot == g)
            .map(|e| e.row)
            .collect();
        for r in &gone {
            if !lot.rows.contains(r) {
                return Err(format!(
                    "row {r} set aside is not a unit of lot \"{}\"",
                    lot.name
                ));
            }
        }
        out[g] = (0..lot.len())
            .filter(|&i| !gone.contains(&lot.rows[i]))
            .collect();
    }
    Ok(out)
}
