//! CSV/TSV with a header row: delimiter detection (comma, semicolon, tab), decimal comma,
//! UTF-8 with or without BOM (Latin-1 accepted for headers and labels), CRLF, quoted fields.

use std::borrow::Cow;

use super::{
    Cell, Column, ColumnData, LoadError, LoadErrorKind, LoadOptions, Lot, Provenance, TextColumn,
    classify, column_letter, match_key, parse_cell, split_header,
};

/// Rows used to decide each column's role.
const CLASSIFY_ROWS: usize = 1000;
/// Longest header cell accepted, in bytes.
const MAX_HEADER_CELL: usize = 4096;
/// Lines used to detect the delimiter.
const SNIFF_LINES: usize = 50;

fn decode(bytes: &[u8], latin1: bool) -> Cow<'_, str> {
    if latin1 {
        Cow::Owned(bytes.iter().map(|&b| b as char).collect())
    } else {
        match std::str::from_utf8(bytes) {
            Ok(s) => Cow::Borrowed(s),
            Err(_) => String::from_utf8_lossy(bytes),
        }
    }
}

/// Picks the delimiter giving a consistent field count over the first lines.
fn sniff_delimiter(sample: &[u8]) -> u8 {
    let mut best = (b',', 0usize, false);
    for delim in [b'\t', b';', b','] {
        let mut rdr = csv::ReaderBuilder::new()
            .has_headers(false)
            .flexible(true)
            .delimiter(delim)
            .from_reader(sample);
        let counts: Vec<usize> = rdr
            .byte_records()
            .take(SNIFF_LINES)
            .filter_map(Result::ok)
            .map(|r| r.len())
            .collect();
        let Some(&header) = counts.first() else {
            continue;
        };
        // The last sampled line may be cut short by the sample boundary.
        let body = &counts[..counts.len().saturating_sub(1).max(1)];
        let consistent = header > 1 && body.iter().all(|&c| c == header);
        let better = match (consistent, best.2) {
            (true, false) => true,
            (false, true) => false,
            _ => header > best.1,
        };
        if better {
            best = (delim, header, consistent);
        }
    }
    best.0
}

/// Decimal comma for tab-separated files: when number-like cells use a comma and none a point.
fn sniff_decimal_comma(sample: &[u8], delim: u8) -> bool {
    if delim == b';' {
        return true;
    }
    if delim != b'\t' {
        return false;
    }
    let (mut comma, mut point) = (0, 0);
    for field in sample.split(|&b| b == delim || b == b'\n' || b == b'\r') {
        let f = field.trim_ascii();
        let digits = f.iter().filter(|b| b.is_ascii_digit()).count();
        if digits == 0 || digits + 2 < f.len() {
            continue;
        }
        if f.contains(&b',') && !f.contains(&b'.') {
            comma += 1;
        } else if f.contains(&b'.') {
            point += 1;
        }
    }
    comma > 0 && point == 0
}

struct Builder {
    header: String,
    name: String,
    unit: Option<String>,
    position: usize,
    numeric: bool,
    values: Vec<f64>,
    text: TextColumn,
    missing: usize,
}

pub(super) fn read(
    path: &str,
    bytes: &[u8],
    options: &LoadOptions,
    mut provenance: Provenance,
) -> Result<Lot, LoadError> {
    // UTF-16 with a byte-order mark (some spreadsheet "Unicode text" exports): decode it.
    let utf16 = if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        let little = bytes[0] == 0xFF;
        let units: Vec<u16> = bytes[2..]
            .chunks(2)
            .map(|c| {
                let pair = [c[0], c.get(1).copied().unwrap_or(0)];
                if little {
                    u16::from_le_bytes(pair)
                } else {
                    u16::from_be_bytes(pair)
                }
            })
            .collect();
        match String::from_utf16(&units) {
            Ok(text) => Some(text.into_bytes()),
            Err(_) => {
                return Err(LoadError::new(
                    path,
                    LoadErrorKind::Encoding(
                        "the file starts like UTF-16 text but is not valid UTF-16".into(),
                    ),
                ));
            }
        }
    } else {
        None
    };
    if utf16.is_some() {
        provenance
            .notes
            .push("the file is UTF-16 text; it was decoded".into());
    }
    let bytes = utf16.as_deref().unwrap_or(bytes);
    let head = &bytes[..bytes.len().min(8192)];
    if head.contains(&0) {
        return Err(LoadError::new(path, LoadErrorKind::Binary));
    }
    let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    if body.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(LoadError::new(path, LoadErrorKind::Empty));
    }
    let latin1 = std::str::from_utf8(body).is_err();
    let sample_end = {
        let end = body.len().min(64 * 1024);
        // Extend to the end of a line so the sample holds whole records (up to 1 MiB: a longer
        // line is sniffed from its start).
        let limit = body.len().min(1024 * 1024);
        body[end..limit]
            .iter()
            .position(|&b| b == b'\n')
            .map_or(limit.max(end), |i| end + i + 1)
    };
    let delim = sniff_delimiter(&body[..sample_end]);
    let decimal_comma = sniff_decimal_comma(&body[..sample_end], delim);
    provenance.format = if delim == b'\t' { "tsv" } else { "csv" }.into();
    provenance.delimiter = Some(delim as char);
    provenance.decimal_comma = decimal_comma;
    provenance.encoding = Some(if latin1 { "Latin-1" } else { "UTF-8" }.into());
    if latin1 {
        provenance
            .notes
            .push("the file is not valid UTF-8; text was read as Latin-1".into());
    }

    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delim)
        .from_reader(body);
    let mut records = rdr.byte_records();
    let header = match records.next() {
        Some(Ok(h)) => h,
        Some(Err(e)) => return Err(LoadError::at_row(path, 1, LoadErrorKind::Io(e.to_string()))),
        None => return Err(LoadError::new(path, LoadErrorKind::Empty)),
    };
    let forced: Vec<String> = options.labels.iter().map(|l| match_key(l)).collect();
    let mut columns: Vec<Builder> = Vec::with_capacity(header.len());
    let mut seen: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    for (pos, raw) in header.iter().enumerate() {
        if raw.len() > MAX_HEADER_CELL {
            return Err(LoadError {
                position: Some(pos),
                ..LoadError::at_row(path, 1, LoadErrorKind::HeaderTooLong { length: raw.len() })
            });
        }
        let text = decode(raw, latin1).trim().to_string();
        let (name, unit) = if text.is_empty() {
            (format!("column {}", column_letter(pos)), None)
        } else {
            split_header(&text)
        };
        let key = match_key(&name);
        if let Some(prev) = seen.get(&key).map(|&i| &columns[i]) {
            return Err(LoadError::at_cell(
                path,
                1,
                &text,
                pos,
                LoadErrorKind::DuplicateColumn {
                    first: format!(
                        "column {} \"{}\"",
                        column_letter(prev.position),
                        prev.header
                    ),
                },
            ));
        }
        seen.insert(key, columns.len());
        columns.push(Builder {
            header: text,
            name,
            unit,
            position: pos,
            numeric: true,
            values: Vec::new(),
            text: TextColumn::default(),
            missing: 0,
        });
    }
    let width = columns.len();

    // Buffer the first rows to decide each column's role.
    let mut sample: Vec<(csv::ByteRecord, usize)> = Vec::new();
    let next_record = |records: &mut csv::ByteRecordsIter<'_, &[u8]>| -> Result<Option<(csv::ByteRecord, usize)>, LoadError> {
        match records.next() {
            None => Ok(None),
            Some(Err(e)) => {
                let row = e.position().map(|p| p.line() as usize).unwrap_or(0);
                Err(LoadError::at_row(path, row, LoadErrorKind::Io(e.to_string())))
            }
            Some(Ok(r)) => {
                let row = r.position().map(|p| p.line() as usize).unwrap_or(0);
                Ok(Some((r, row)))
            }
        }
    };
    while sample.len() < CLASSIFY_ROWS {
        match next_record(&mut records)? {
            Some(rec) => sample.push(rec),
            None => break,
        }
    }
    if sample.is_empty() {
        return Err(LoadError::at_row(path, 1, LoadErrorKind::HeaderOnly));
    }
    for (k, col) in columns.iter_mut().enumerate() {
        let (mut num, mut txt) = (0, 0);
        for (rec, _) in &sample {
            match rec
                .get(k)
                .map(|b| parse_cell(&decode(b, latin1), decimal_comma))
            {
                Some(Cell::Number(_) | Cell::Infinite) => num += 1,
                Some(Cell::Text) => txt += 1,
                _ => {}
            }
        }
        let forced_label =
            forced.contains(&match_key(&col.name)) || forced.contains(&match_key(&col.header));
        col.numeric = classify(num, txt, forced_label);
    }

    let mut rows: Vec<u32> = Vec::with_capacity(sample.len());
    let mut push =
        |rec: &csv::ByteRecord, row: usize, columns: &mut [Builder]| -> Result<(), LoadError> {
            if rec.len() < width {
                // A blank line inside the data reads as one empty field: treat as no unit.
                if rec.len() == 1 && rec.get(0).is_some_and(|f| f.trim_ascii().is_empty()) {
                    return Ok(());
                }
                return Err(LoadError::at_row(
                    path,
                    row,
                    LoadErrorKind::Ragged {
                        found: rec.len(),
                        expected: width,
                    },
                ));
            }
            if rec.len() > width && rec.iter().skip(width).any(|f| !f.trim_ascii().is_empty()) {
                return Err(LoadError::at_row(
                    path,
                    row,
                    LoadErrorKind::Ragged {
                        found: rec.len(),
                        expected: width,
                    },
                ));
            }
            for (k, col) in columns.iter_mut().enumerate() {
                let raw = rec.get(k).unwrap_or_default();
                if col.numeric {
                    let text = decode(raw, latin1);
                    let v = match parse_cell(&text, decimal_comma) {
                        Cell::Number(v) => v,
                        Cell::Missing => {
                            col.missing += 1;
                            f64::NAN
                        }
                        Cell::Infinite => {
                            return Err(LoadError::at_cell(
                                path,
                                row,
                                &col.header,
                                col.position,
                                LoadErrorKind::NotFinite {
                                    text: super::error::shorten(text.trim()),
                                },
                            ));
                        }
                        Cell::Text => {
                            return Err(LoadError::at_cell(
                                path,
                                row,
                                &col.header,
                                col.position,
                                LoadErrorKind::NotNumeric {
                                    text: super::error::shorten(text.trim()),
                                },
                            ));
                        }
                    };
                    col.values.push(v);
                } else {
                    let text = decode(raw, latin1);
                    let t = text.trim();
                    if t.is_empty() {
                        col.missing += 1;
                    }
                    col.text.push(t);
                }
            }
            rows.push(u32::try_from(row).unwrap_or(u32::MAX));
            Ok(())
        };
    for (rec, row) in &sample {
        push(rec, *row, &mut columns)?;
    }
    drop(sample);
    while let Some((rec, row)) = next_record(&mut records)? {
        push(&rec, row, &mut columns)?;
    }
    if rows.is_empty() {
        return Err(LoadError::at_row(path, 1, LoadErrorKind::HeaderOnly));
    }
    let n = rows.len();
    let mut out = Vec::with_capacity(width);
    for col in columns {
        if col.header.is_empty() && col.missing == n {
            provenance.notes.push(format!(
                "column {} has no header and no values; ignored",
                column_letter(col.position)
            ));
            continue;
        }
        out.push(Column {
            header: col.header,
            name: col.name,
            unit: col.unit,
            position: col.position,
            data: if col.numeric {
                ColumnData::Numeric(col.values)
            } else {
                ColumnData::Text(col.text)
            },
            missing: col.missing,
        });
    }
    Ok(Lot {
        name: String::new(),
        provenance,
        columns: out,
        rows,
    })
}
