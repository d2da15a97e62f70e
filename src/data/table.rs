//! A table that arrives already split into typed cells (a database query's result, a Parquet
//! file): the same column rules as a text file. A column is a characteristic when more than
//! half of its first non-missing cells are numbers; text in a characteristic is an error that
//! names the column and the row's position; NULL is a missing cell.

use super::error::{LoadError, LoadErrorKind, shorten};
use super::header::Headers;
use super::{
    Cell, Column, ColumnData, LoadOptions, Lot, Provenance, TextColumn, classify, parse_cell,
};

/// One cell as a source delivers it.
#[derive(Debug, Clone, PartialEq)]
pub enum RawCell {
    /// NULL: a missing cell.
    Null,
    /// A value the source stores as a number.
    Number(f64),
    /// A value the source stores as text (read as a number when it is one, as a file's cell).
    Text(String),
}

impl RawCell {
    fn kind(&self) -> Cell {
        match self {
            RawCell::Null => Cell::Missing,
            RawCell::Number(v) if v.is_nan() => Cell::Missing,
            RawCell::Number(v) if v.is_infinite() => Cell::Infinite,
            RawCell::Number(v) => Cell::Number(*v),
            RawCell::Text(t) => parse_cell(t, false),
        }
    }

    /// The cell as text (numbers in their shortest exact form, NULL empty).
    pub fn text(&self) -> String {
        match self {
            RawCell::Null => String::new(),
            RawCell::Number(v) => format!("{v}"),
            RawCell::Text(t) => t.clone(),
        }
    }
}

/// How many cells decide a column's role (as for files).
const CLASSIFY_CELLS: usize = 1000;

/// Builds a lot table from a header and rows of typed cells. `rows_label` names a row's
/// position in messages ("result row", "data row"); positions count from 1.
///
/// # Errors
/// A repeated column name, text or an infinite value in a characteristic, or no rows.
pub fn from_cells(
    path: &str,
    header: &[String],
    rows: &[Vec<RawCell>],
    rows_label: &'static str,
    options: &LoadOptions,
    provenance: Provenance,
) -> Result<Lot, LoadError> {
    if header.is_empty() {
        return Err(LoadError::new(path, LoadErrorKind::Empty));
    }
    if rows.is_empty() {
        return Err(LoadError {
            row_label: rows_label,
            ..LoadError::new(path, LoadErrorKind::HeaderOnly)
        });
    }
    let at = |row: usize, text: &str, pos: usize, kind: LoadErrorKind| LoadError {
        row_label: rows_label,
        ..LoadError::at_cell(path, row + 1, text, pos, kind)
    };
    let mut headers = Headers::new(options);
    let mut columns = Vec::with_capacity(header.len());
    for (pos, text) in header.iter().enumerate() {
        let (name, unit) = Headers::name(text, pos);
        headers
            .claim(path, 0, text, &name, pos)
            .map_err(|e| LoadError { row: None, ..e })?;
        let cell = |r: &Vec<RawCell>| r.get(pos).cloned().unwrap_or(RawCell::Null);
        let (mut num, mut txt) = (0, 0);
        for r in rows {
            match cell(r).kind() {
                Cell::Number(_) | Cell::Infinite => num += 1,
                Cell::Text => txt += 1,
                Cell::Missing => {}
            }
            if num + txt >= CLASSIFY_CELLS {
                break;
            }
        }
        let numeric = classify(num, txt, headers.forced_label(&name, text));
        let mut missing = 0;
        let data = if numeric {
            let mut values = Vec::with_capacity(rows.len());
            for (i, r) in rows.iter().enumerate() {
                let c = cell(r);
                match c.kind() {
                    Cell::Number(v) => values.push(v),
                    Cell::Missing => {
                        missing += 1;
                        values.push(f64::NAN);
                    }
                    Cell::Infinite => {
                        return Err(at(
                            i,
                            text,
                            pos,
                            LoadErrorKind::NotFinite {
                                text: shorten(&c.text()),
                            },
                        ));
                    }
                    Cell::Text => {
                        return Err(at(
                            i,
                            text,
                            pos,
                            LoadErrorKind::NotNumeric {
                                text: shorten(&c.text()),
                            },
                        ));
                    }
                }
            }
            ColumnData::Numeric(values)
        } else {
            let mut tc = TextColumn::default();
            for r in rows {
                let t = cell(r).text();
                if t.is_empty() {
                    missing += 1;
                }
                tc.push(&t);
            }
            ColumnData::Text(tc)
        };
        columns.push(Column {
            header: text.clone(),
            name,
            unit,
            position: pos,
            data,
            missing,
        });
    }
    let mut provenance = provenance;
    provenance.rows_read = rows.len();
    Ok(Lot {
        name: String::new(),
        provenance,
        columns,
        rows: (1..=rows.len())
            .map(|r| u32::try_from(r).unwrap_or(u32::MAX))
            .collect(),
    })
}
