//! Parquet lot files, read through the Apache Parquet crate's row reader: numeric columns
//! (integers, floats, decimals) are characteristics by the same rule as a text file's,
//! others labels; a null is a missing cell.

use std::path::Path;

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::Field;

use super::error::{LoadError, LoadErrorKind};
use super::{LoadOptions, Lot, Provenance, RawCell, from_cells};

/// True for a Parquet file (its magic bytes, or the extension).
pub(crate) fn is_parquet(path: &str, head: &[u8]) -> bool {
    head.starts_with(b"PAR1")
        || Path::new(path)
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
}

fn cell(f: &Field) -> RawCell {
    match f {
        Field::Null => RawCell::Null,
        Field::Byte(v) => RawCell::Number(f64::from(*v)),
        Field::Short(v) => RawCell::Number(f64::from(*v)),
        Field::Int(v) => RawCell::Number(f64::from(*v)),
        Field::Long(v) => RawCell::Number(*v as f64),
        Field::UByte(v) => RawCell::Number(f64::from(*v)),
        Field::UShort(v) => RawCell::Number(f64::from(*v)),
        Field::UInt(v) => RawCell::Number(f64::from(*v)),
        Field::ULong(v) => RawCell::Number(*v as f64),
        Field::Float16(v) => RawCell::Number(f64::from(*v)),
        Field::Float(v) => RawCell::Number(f64::from(*v)),
        Field::Double(v) => RawCell::Number(*v),
        Field::Str(s) => RawCell::Text(s.clone()),
        // Decimals as their exact decimal text (read as a file's cell); dates, times,
        // booleans and nested values as text labels.
        other => RawCell::Text(other.to_string()),
    }
}

/// Reads a Parquet file as a lot table.
///
/// # Errors
/// The file cannot be read or is not Parquet, a column as for text files.
pub(crate) fn read(
    path: &str,
    options: &LoadOptions,
    mut provenance: Provenance,
) -> Result<Lot, LoadError> {
    let bad = |e: String| LoadError::new(path, LoadErrorKind::Spreadsheet(e));
    let file = std::fs::File::open(path)
        .map_err(|e| LoadError::new(path, LoadErrorKind::Io(e.to_string())))?;
    let reader = SerializedFileReader::new(file)
        .map_err(|e| bad(format!("not a Parquet file lotshift can read: {e}")))?;
    let meta = reader.metadata().file_metadata();
    let schema = meta.schema_descr();
    let header: Vec<String> = schema
        .root_schema()
        .get_fields()
        .iter()
        .map(|f| f.name().to_string())
        .collect();
    let described: Vec<String> = (0..schema.num_columns())
        .map(|k| {
            let c = schema.column(k);
            let converted = c.converted_type();
            let logical = if converted == parquet::basic::ConvertedType::NONE {
                String::new()
            } else {
                format!(" ({converted})")
            };
            format!("{}: {}{}", c.path().string(), c.physical_type(), logical)
        })
        .collect();
    provenance
        .notes
        .push(format!("Parquet schema: {}", described.join("; ")));
    provenance.format = "parquet".into();
    let rows_iter = reader
        .get_row_iter(None)
        .map_err(|e| bad(format!("cannot read the rows: {e}")))?;
    let mut rows = Vec::with_capacity(usize::try_from(meta.num_rows()).unwrap_or(0));
    for row in rows_iter {
        let row = row.map_err(|e| bad(format!("cannot read row {}: {e}", rows.len() + 1)))?;
        rows.push(
            row.get_column_iter()
                .map(|(_, f)| cell(f))
                .collect::<Vec<_>>(),
        );
    }
    from_cells(path, &header, &rows, "data row", options, provenance)
}
