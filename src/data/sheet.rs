//! Spreadsheets (XLSX, XLSM, XLSB, XLS, ODS) through calamine: the first sheet with data by
//! default, a named sheet on request.

use std::io::Cursor;

use calamine::{Data, Range, Reader as _, open_workbook_auto_from_rs};

use super::header::Headers;
use super::{
    Cell, Column, ColumnData, LoadError, LoadErrorKind, LoadOptions, Lot, Provenance, TextColumn,
    classify, parse_cell,
};

const CLASSIFY_ROWS: usize = 1000;

fn cell_kind(d: &Data) -> Cell {
    match d {
        Data::Int(i) => Cell::Number(*i as f64),
        Data::Float(f) if f.is_finite() => Cell::Number(*f),
        Data::Float(f) if f.is_nan() => Cell::Missing,
        Data::Float(_) => Cell::Infinite,
        Data::String(s) => match parse_cell(s, false) {
            Cell::Text => parse_cell(s, true),
            other => other,
        },
        Data::Empty | Data::Error(_) => Cell::Missing,
        Data::Bool(_) | Data::DateTime(_) | Data::DateTimeIso(_) | Data::DurationIso(_) => {
            Cell::Text
        }
    }
}

fn cell_text(d: &Data) -> String {
    match d {
        Data::Empty | Data::Error(_) => String::new(),
        other => other.to_string().trim().to_string(),
    }
}

fn has_data(r: &Range<Data>) -> bool {
    r.rows()
        .any(|row| row.iter().any(|c| !matches!(c, Data::Empty)))
}

pub(super) fn read(
    path: &str,
    bytes: &[u8],
    ext: &str,
    options: &LoadOptions,
    mut provenance: Provenance,
) -> Result<Lot, LoadError> {
    // A malformed workbook must give an error, never bring the program down.
    let opened = std::panic::catch_unwind(
        || -> Result<(String, Range<Data>, Vec<String>), LoadError> {
            let mut book = open_workbook_auto_from_rs(Cursor::new(bytes))
                .map_err(|e| LoadError::new(path, LoadErrorKind::Spreadsheet(e.to_string())))?;
            let names = book.sheet_names();
            if let Some(want) = &options.sheet {
                let Some(name) = names.iter().find(|n| n.eq_ignore_ascii_case(want)).cloned()
                else {
                    return Err(LoadError::new(
                        path,
                        LoadErrorKind::NoSuchSheet {
                            sheet: want.clone(),
                            available: names,
                        },
                    ));
                };
                let range = book
                    .worksheet_range(&name)
                    .map_err(|e| LoadError::new(path, LoadErrorKind::Spreadsheet(e.to_string())))?;
                return Ok((name, range, Vec::new()));
            }
            let mut skipped = Vec::new();
            for name in &names {
                let range = book
                    .worksheet_range(name)
                    .map_err(|e| LoadError::new(path, LoadErrorKind::Spreadsheet(e.to_string())))?;
                if has_data(&range) {
                    return Ok((name.clone(), range, skipped));
                }
                skipped.push(name.clone());
            }
            Err(LoadError::new(path, LoadErrorKind::NoData))
        },
    );
    let (sheet, range, skipped) = match opened {
        Ok(r) => r?,
        Err(_) => {
            return Err(LoadError::new(
                path,
                LoadErrorKind::Spreadsheet("the workbook is malformed".into()),
            ));
        }
    };
    provenance.format = if ext.is_empty() {
        "spreadsheet".into()
    } else {
        ext.to_string()
    };
    provenance.sheet = Some(sheet.clone());
    for s in skipped {
        provenance.notes.push(format!(
            "sheet \"{s}\" is empty; read sheet \"{sheet}\" instead"
        ));
    }
    let (row0, col0) = range.start().unwrap_or((0, 0));
    let mut rows_iter = range
        .rows()
        .enumerate()
        .map(|(i, r)| (row0 as usize + i + 1, r))
        .skip_while(|(_, r)| r.iter().all(|c| matches!(c, Data::Empty)));
    let Some((header_row, header)) = rows_iter.next() else {
        return Err(LoadError::new(path, LoadErrorKind::Empty));
    };
    let body: Vec<(usize, &[Data])> = rows_iter.collect();
    if body
        .iter()
        .all(|(_, r)| r.iter().all(|c| matches!(c, Data::Empty)))
    {
        return Err(LoadError::at_row(
            path,
            header_row,
            LoadErrorKind::HeaderOnly,
        ));
    }
    let mut headers = Headers::new(options);
    let mut columns: Vec<Column> = Vec::new();
    for (k, h) in header.iter().enumerate() {
        let pos = col0 as usize + k;
        let text = cell_text(h);
        let (name, unit) = Headers::name(&text, pos);
        let all_empty = body.iter().all(|(_, r)| {
            r.get(k)
                .is_none_or(|c| matches!(cell_kind(c), Cell::Missing))
        });
        if text.is_empty() && all_empty {
            continue;
        }
        headers.claim(path, header_row, &text, &name, pos)?;
        let (mut num, mut txt) = (0, 0);
        for (_, r) in body.iter().take(CLASSIFY_ROWS) {
            match r.get(k).map(cell_kind) {
                Some(Cell::Number(_) | Cell::Infinite) => num += 1,
                Some(Cell::Text) => txt += 1,
                _ => {}
            }
        }
        let numeric = classify(num, txt, headers.forced_label(&name, &text));
        let mut missing = 0;
        let data = if numeric {
            let mut values = Vec::with_capacity(body.len());
            for (row, r) in &body {
                let cell = r.get(k).unwrap_or(&Data::Empty);
                match cell_kind(cell) {
                    Cell::Number(v) => values.push(v),
                    Cell::Missing => {
                        missing += 1;
                        values.push(f64::NAN);
                    }
                    Cell::Infinite => {
                        return Err(LoadError::at_cell(
                            path,
                            *row,
                            &text,
                            pos,
                            LoadErrorKind::NotFinite {
                                text: super::error::shorten(&cell_text(cell)),
                            },
                        ));
                    }
                    Cell::Text => {
                        return Err(LoadError::at_cell(
                            path,
                            *row,
                            &text,
                            pos,
                            LoadErrorKind::NotNumeric {
                                text: super::error::shorten(&cell_text(cell)),
                            },
                        ));
                    }
                }
            }
            ColumnData::Numeric(values)
        } else {
            let mut tc = TextColumn::default();
            for (_, r) in &body {
                let t = r.get(k).map(cell_text).unwrap_or_default();
                if t.is_empty() {
                    missing += 1;
                }
                tc.push(&t);
            }
            ColumnData::Text(tc)
        };
        columns.push(Column {
            header: text,
            name,
            unit,
            position: pos,
            data,
            missing,
        });
    }
    Ok(Lot {
        name: String::new(),
        provenance,
        columns,
        rows: body
            .iter()
            .map(|(r, _)| u32::try_from(*r).unwrap_or(u32::MAX))
            .collect(),
    })
}
