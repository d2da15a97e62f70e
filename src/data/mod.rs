//! Lot files: CSV/TSV (delimiter and decimal-comma detection), spreadsheets, one file split
//! by a lot column, column matching between two lots and listwise exclusion of missing cells.
//!
//! One job, kept in one file: the lot's types, the cell parser and the loader entry points that every format shares.

mod delimited;
mod error;
pub mod exclusions;
mod header;
mod pair;
mod parquet;
pub mod screen;
mod sheet;
pub mod spec;
mod split;
mod table;

pub use error::shorten as error_shorten;
pub use error::{LoadError, LoadErrorKind, PrepareError};
pub use pair::{
    LeftOut, Pairing, Prepared, PreparedLot, Selection, Unmatched, counterpart, label_text,
    prepare, prepare_releasing,
};
pub use split::{lot_column_candidates, lot_values, split_lot};
pub use table::{RawCell, from_cells};

use std::path::Path;

use sha2::{Digest as _, Sha256};

/// How to read a file.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LoadOptions {
    /// Sheet to read from a spreadsheet (default: the first sheet with data).
    pub sheet: Option<String>,
    /// Columns to treat as labels even when their values look numeric (serial numbers...).
    pub labels: Vec<String>,
}

/// Where a lot came from and what was read.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Provenance {
    /// Path as given.
    pub path: String,
    /// File name without directories.
    pub file_name: String,
    /// SHA-256 of the file's bytes, lower-case hex.
    pub sha256: String,
    /// File size in bytes.
    pub size_bytes: u64,
    /// `csv`, `xlsx`, `xls`, `ods`...
    pub format: String,
    /// Field delimiter of a text file.
    pub delimiter: Option<char>,
    /// Whether a decimal comma was read.
    pub decimal_comma: bool,
    /// The decimal mark the numbers were seen to use (text files), for `inspect`.
    #[serde(default)]
    pub decimal_mark: String,
    /// Text encoding of a text file.
    pub encoding: Option<String>,
    /// Sheet read from a spreadsheet.
    pub sheet: Option<String>,
    /// Lot column and value when the lot was split out of a file holding several.
    pub split: Option<(String, String)>,
    /// Data rows read.
    pub rows_read: usize,
    /// Things worth knowing about how the file was read.
    pub notes: Vec<String>,
    /// Columns the user asked to read as labels.
    #[serde(default)]
    pub forced_labels: Vec<String>,
    /// The query the rows came from (database sources; `path` is then the URL and `sha256`
    /// the hash of the rows' canonical stream).
    #[serde(default)]
    pub query: Option<String>,
}

impl Provenance {
    /// The provenance of rows that came from elsewhere than a file (a database query),
    /// named `name`, of kind `format`; the caller fills in what it knows.
    pub fn of_rows(name: &str, format: &str) -> Provenance {
        Provenance {
            format: format.to_string(),
            ..new_provenance(name, String::new(), 0, &LoadOptions::default())
        }
    }
}

/// Compact storage for a text column: one buffer and the end offset of each cell.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TextColumn {
    buf: String,
    ends: Vec<usize>,
}

impl TextColumn {
    /// Appends a cell.
    pub fn push(&mut self, s: &str) {
        self.buf.push_str(s);
        self.ends.push(self.buf.len());
    }
    /// The `i`-th cell.
    pub fn get(&self, i: usize) -> &str {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.buf[start..self.ends[i]]
    }
    /// Number of cells.
    pub fn len(&self) -> usize {
        self.ends.len()
    }
    /// True when there are no cells.
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }
    /// The cells at `rows`, in that order.
    pub fn select(&self, rows: &[usize]) -> TextColumn {
        let mut out = TextColumn::default();
        for &r in rows {
            out.push(self.get(r));
        }
        out
    }
}

/// A column's values.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnData {
    /// A measured characteristic; missing cells are NaN.
    Numeric(Vec<f64>),
    /// A label (serial number, timestamp, operator...).
    Text(TextColumn),
}

/// One column of a lot.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Header cell as written.
    pub header: String,
    /// Name without the unit.
    pub name: String,
    /// Unit from `name (unit)` or `name [unit]`.
    pub unit: Option<String>,
    /// Position in the file, 0-based.
    pub position: usize,
    /// Values.
    pub data: ColumnData,
    /// Missing cells.
    pub missing: usize,
}

impl Column {
    /// Whether this column is a characteristic (numeric).
    pub fn is_numeric(&self) -> bool {
        matches!(self.data, ColumnData::Numeric(_))
    }
    /// The cell at `row` as text (numbers formatted, missing as empty).
    pub fn text(&self, row: usize) -> String {
        match &self.data {
            ColumnData::Numeric(v) => {
                if v[row].is_nan() {
                    String::new()
                } else {
                    format!("{}", v[row])
                }
            }
            ColumnData::Text(t) => t.get(row).to_string(),
        }
    }
}

/// One lot as read from a file: columns plus the spreadsheet row of each unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Lot {
    /// Display name (file stem, or the lot value for a split file).
    pub name: String,
    /// Where it came from.
    pub provenance: Provenance,
    /// Columns in file order.
    pub columns: Vec<Column>,
    /// Row number of each unit as a spreadsheet shows it (header is row 1).
    pub rows: Vec<u32>,
}

impl Lot {
    /// Number of units (data rows).
    pub fn len(&self) -> usize {
        self.rows.len()
    }
    /// True when the lot has no units.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }
    /// Frees the numeric columns' values (kept: names, units, missing counts, labels, rows),
    /// once the unit matrices are built and the numbers are no longer needed here.
    pub fn release_numbers(&mut self) {
        for c in &mut self.columns {
            if let ColumnData::Numeric(v) = &mut c.data {
                *v = Vec::new();
            }
        }
    }

    /// The units at `idx` (in that order), every column kept; provenance unchanged.
    pub fn select_units(&self, idx: &[usize]) -> Lot {
        let columns = self
            .columns
            .iter()
            .map(|c| {
                let data = match &c.data {
                    ColumnData::Numeric(v) => {
                        ColumnData::Numeric(idx.iter().map(|&i| v[i]).collect())
                    }
                    ColumnData::Text(t) => ColumnData::Text(t.select(idx)),
                };
                let missing = match &data {
                    ColumnData::Numeric(v) => v.iter().filter(|x| x.is_nan()).count(),
                    ColumnData::Text(t) => (0..t.len()).filter(|&i| t.get(i).is_empty()).count(),
                };
                Column {
                    header: c.header.clone(),
                    name: c.name.clone(),
                    unit: c.unit.clone(),
                    position: c.position,
                    data,
                    missing,
                }
            })
            .collect();
        Lot {
            name: self.name.clone(),
            provenance: self.provenance.clone(),
            columns,
            rows: idx.iter().map(|&i| self.rows[i]).collect(),
        }
    }

    /// Finds a column by name, ignoring case, spaces and any unit.
    pub fn column(&self, name: &str) -> Option<&Column> {
        let key = match_key(name);
        self.columns
            .iter()
            .find(|c| match_key(&c.name) == key || match_key(&c.header) == key)
    }
}

/// Column-matching key: lower case, with whitespace, hyphens, underscores and dots removed,
/// so `hub length`, `Hub-Length`, `hub_length` and `hub.length` are one column.
pub fn match_key(name: &str) -> String {
    name.chars()
        .filter(|c| !c.is_whitespace() && !matches!(c, '-' | '_' | '.'))
        .flat_map(char::to_lowercase)
        .collect()
}

/// Splits `name (unit)` / `name [unit]` into name and unit.
pub fn split_header(header: &str) -> (String, Option<String>) {
    let h = header.trim();
    for (open, close) in [('(', ')'), ('[', ']')] {
        if let Some(stripped) = h.strip_suffix(close)
            && let Some(pos) = stripped.rfind(open)
        {
            let name = stripped[..pos].trim();
            let unit = stripped[pos + open.len_utf8()..].trim();
            if !name.is_empty() && !unit.is_empty() {
                return (name.to_string(), Some(unit.to_string()));
            }
        }
    }
    (h.to_string(), None)
}

/// Spreadsheet column letters for a 0-based position: A, B, ..., Z, AA, AB...
pub fn column_letter(position: usize) -> String {
    let mut n = position + 1;
    let mut out = Vec::new();
    while n > 0 {
        let r = (n - 1) % 26;
        out.push(b'A' + r as u8);
        n = (n - 1) / 26;
    }
    out.reverse();
    String::from_utf8(out).unwrap_or_default()
}

/// What a cell holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Cell {
    Missing,
    Number(f64),
    Infinite,
    Text,
}

/// Missing-value tokens (case-insensitive), besides an empty cell.
pub const MISSING_TOKENS: [&str; 7] = ["na", "n/a", "nan", "-", "#n/a", "null", "#na"];

/// Powers of ten exactly representable as f64.
#[cfg_attr(feature = "fast-float2-reader", allow(dead_code))]
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Classifies a cell's raw bytes. Plain decimals (`-12.345`, `12,345` with a decimal comma)
/// take a fast path: digits into an integer below 2⁵³ divided by an exact power of ten is one
/// correctly rounded operation (Clinger 1990), so the result equals the standard parser's.
/// Anything else goes through [`parse_cell`].
pub(crate) fn parse_cell_bytes(raw: &[u8], decimal_comma: bool) -> Cell {
    if let Some(v) = fast_decimal(raw, decimal_comma) {
        return Cell::Number(v);
    }
    let s = raw.trim_ascii();
    if s.is_empty() {
        return Cell::Missing;
    }
    match std::str::from_utf8(s) {
        Ok(text) => parse_cell(text, decimal_comma),
        Err(_) => Cell::Text,
    }
}

/// Which reader the loader parses plain decimals with: its own ([`parse_number_prefix`]), or
/// fast-float2 in a build with the `fast-float2-reader` feature (for the benchmark).
pub const NUMBER_READER: &str = if cfg!(feature = "fast-float2-reader") {
    "fast-float2"
} else {
    "lotshift's decimal reader"
};

/// The plain decimal at the start of `raw` and the bytes it takes, as the one-pass line
/// reader parses a number cell where it stands in its line (`None` for any other form, which
/// the general rules then read). Public for the loading benchmark.
pub fn parse_number_prefix(raw: &[u8], decimal_comma: bool) -> Option<(f64, usize)> {
    fast_decimal_prefix(raw, decimal_comma)
}

/// Powers of ten for the runs of up to eight digits that [`digits`] reads at once.
#[cfg_attr(feature = "fast-float2-reader", allow(dead_code))]
const POW10_U64: [u64; 9] = [
    1,
    10,
    100,
    1_000,
    10_000,
    100_000,
    1_000_000,
    10_000_000,
    100_000_000,
];

/// Reads ASCII digits from `raw[*i..]` into `mantissa` (wrapping: the caller limits the
/// count); returns how many.
///
/// Where eight bytes are left, they are read as one 64-bit word: the run of digits at its
/// start is found with bit masks and its value formed with three multiplications (the
/// eight-digit method of Lemire, "Number parsing at a gigabyte per second", 2021, with the
/// run shifted so that the bytes after it read as leading zeros). The rest goes a byte at a
/// time. Both give the integer the digits spell.
#[cfg_attr(feature = "fast-float2-reader", allow(dead_code))]
#[inline]
fn digits(raw: &[u8], i: &mut usize, mantissa: &mut u64) -> usize {
    let start = *i;
    while let Some(Ok(word)) = raw.get(*i..*i + 8).map(<[u8; 8]>::try_from) {
        // Each byte's digit value (0..=9 for a digit, anything else for another byte).
        let x = u64::from_le_bytes(word) ^ 0x3030_3030_3030_3030;
        // Bit 7 of a byte is set where it is not a digit (no carry crosses a byte).
        let other =
            (x | ((x & 0x7F7F_7F7F_7F7F_7F7F) + 0x7676_7676_7676_7676)) & 0x8080_8080_8080_8080;
        let run = if other == 0 {
            8
        } else {
            (other.trailing_zeros() / 8) as usize
        };
        if run == 0 {
            return *i - start;
        }
        // The first byte is the most significant digit; shifted up, the bytes after the run
        // drop out and zero digits come in below.
        let v = if run == 8 { x } else { x << (8 * (8 - run)) };
        let v = v.wrapping_mul(10 * 256 + 1) >> 8;
        let v = (v & 0x00FF_00FF_00FF_00FF).wrapping_mul(100 * 65_536 + 1) >> 16;
        let v = (v & 0x0000_FFFF_0000_FFFF).wrapping_mul(10_000 * (1 << 32) + 1) >> 32;
        *mantissa = mantissa.wrapping_mul(POW10_U64[run]).wrapping_add(v);
        *i += run;
        if run < 8 {
            return *i - start;
        }
    }
    while let Some(&b) = raw.get(*i) {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        *mantissa = mantissa.wrapping_mul(10).wrapping_add(u64::from(d));
        *i += 1;
    }
    *i - start
}

/// `[-+]digits[.digits]` with at most 15 digits in all, exactly; `None` for anything else.
#[inline]
fn fast_decimal(raw: &[u8], decimal_comma: bool) -> Option<f64> {
    match fast_decimal_prefix(raw, decimal_comma) {
        Some((v, used)) if used == raw.len() => Some(v),
        _ => None,
    }
}

/// The plain decimal at the start of `raw` (as [`fast_decimal`] reads a whole cell) and the
/// number of bytes it takes; the caller checks what follows it.
#[cfg(not(feature = "fast-float2-reader"))]
#[inline]
pub(crate) fn fast_decimal_prefix(raw: &[u8], decimal_comma: bool) -> Option<(f64, usize)> {
    let mut i = 0usize;
    let n = raw.len();
    let neg = match raw.first() {
        Some(b'-') => {
            i = 1;
            true
        }
        Some(b'+') => {
            i = 1;
            false
        }
        _ => false,
    };
    let mut mantissa: u64 = 0;
    let int_digits = digits(raw, &mut i, &mut mantissa);
    let mut frac = 0usize;
    if i < n && (raw[i] == b'.' || decimal_comma && raw[i] == b',') {
        i += 1;
        frac = digits(raw, &mut i, &mut mantissa);
    }
    let digits = int_digits + frac;
    if digits == 0 || digits > 15 {
        return None;
    }
    // Below 2⁵³ (at most 15 digits), so the signed conversion (one instruction) is exact.
    let v = mantissa as i64 as f64 / POW10[frac];
    Some((if neg { -v } else { v }, i))
}

/// As the decimal reader above, by fast-float2 (the `fast-float2-reader` feature, for the
/// in-loader comparison of the pipeline benchmark). It is correctly rounded like the standard
/// parser, so any finite number it reads is the value the general rules give; the rest (and
/// any decimal comma, which it does not read) go to the general rules.
#[cfg(feature = "fast-float2-reader")]
#[inline]
pub(crate) fn fast_decimal_prefix(raw: &[u8], decimal_comma: bool) -> Option<(f64, usize)> {
    match fast_float2::parse_partial::<f64, _>(raw) {
        Ok((v, used)) if v.is_finite() && !(decimal_comma && raw.get(used) == Some(&b',')) => {
            Some((v, used))
        }
        _ => None,
    }
}

/// Classifies a cell's text, reading a decimal comma when `decimal_comma`.
pub(crate) fn parse_cell(raw: &str, decimal_comma: bool) -> Cell {
    let s = raw.trim();
    if s.is_empty() {
        return Cell::Missing;
    }
    if s.len() <= 4 && MISSING_TOKENS.iter().any(|t| t.eq_ignore_ascii_case(s)) {
        return Cell::Missing;
    }
    let first = s.as_bytes()[0];
    if !(first.is_ascii_digit() || matches!(first, b'-' | b'+' | b'.' | b',' | b'i' | b'I')) {
        return Cell::Text;
    }
    let parsed = if decimal_comma && s.contains(',') {
        if s.contains('.') || s.matches(',').count() > 1 {
            return Cell::Text;
        }
        s.replace(',', ".").parse::<f64>()
    } else {
        s.parse::<f64>()
    };
    match parsed {
        Ok(v) if v.is_nan() => Cell::Missing,
        Ok(v) if v.is_infinite() => Cell::Infinite,
        Ok(v) => Cell::Number(v),
        Err(_) => Cell::Text,
    }
}

/// Reads a lot file of any supported kind, named after its file stem.
///
/// # Errors
/// A [`LoadError`] naming the file, and where it applies the row and column.
pub fn load(path: &Path, options: &LoadOptions) -> Result<Lot, LoadError> {
    use std::io::Read as _;
    let display = path.display().to_string();
    let io = |e: std::io::Error| LoadError::new(&display, LoadErrorKind::Io(e.to_string()));
    let mut magic = [0u8; 4];
    let got = std::fs::File::open(path)
        .and_then(|mut f| f.read(&mut magic))
        .map_err(io)?;
    if parquet::is_parquet(&display, &magic[..got]) {
        let bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
        let digest = {
            let data = std::fs::read(path).map_err(io)?;
            hex(&Sha256::digest(&data))
        };
        let provenance = new_provenance(&display, digest, bytes, options);
        let lot = parquet::read(&display, options, provenance)?;
        return Ok(finish_lot(&display, lot));
    }
    if is_spreadsheet(&display, &magic[..got]) {
        let bytes = std::fs::read(path).map_err(io)?;
        return load_bytes(&display, &bytes, options);
    }
    // Text is read from disk in chunks: memory holds the numbers, not the file.
    let provenance = new_provenance(&display, String::new(), 0, options);
    let lot = delimited::read_file(&display, path, options, provenance)?;
    Ok(finish_lot(&display, lot))
}

fn extension(path: &str) -> String {
    Path::new(path)
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default()
}

/// Spreadsheet by extension, or by the zip / OLE signature at the start of the file.
fn is_spreadsheet(path: &str, head: &[u8]) -> bool {
    matches!(
        extension(path).as_str(),
        "xlsx" | "xlsm" | "xlsb" | "xls" | "ods"
    ) || head.starts_with(b"PK\x03\x04")
        || head.starts_with(&[0xD0, 0xCF, 0x11, 0xE0])
}

fn new_provenance(
    path: &str,
    sha256: String,
    size_bytes: u64,
    options: &LoadOptions,
) -> Provenance {
    let file_name = Path::new(path)
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string());
    Provenance {
        path: path.to_string(),
        file_name,
        sha256,
        size_bytes,
        format: String::new(),
        delimiter: None,
        decimal_comma: false,
        decimal_mark: String::new(),
        encoding: None,
        sheet: None,
        split: None,
        rows_read: 0,
        notes: Vec::new(),
        forced_labels: options.labels.clone(),
        query: None,
    }
}

fn finish_lot(path: &str, mut lot: Lot) -> Lot {
    lot.name = Path::new(path)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| lot.provenance.file_name.clone());
    lot.provenance.rows_read = lot.rows.len();
    lot
}

/// Reads a lot from bytes already in memory (`path` names it in messages and provenance).
///
/// # Errors
/// As [`load`].
pub fn load_bytes(path: &str, bytes: &[u8], options: &LoadOptions) -> Result<Lot, LoadError> {
    let provenance = new_provenance(
        path,
        hex(&Sha256::digest(bytes)),
        bytes.len() as u64,
        options,
    );
    let ext = extension(path);
    let lot = if is_spreadsheet(path, bytes) {
        sheet::read(path, bytes, &ext, options, provenance)?
    } else {
        delimited::read(path, bytes, options, provenance)?
    };
    Ok(finish_lot(path, lot))
}

/// Lower-case hex of bytes.
pub fn hex(bytes: &[u8]) -> String {
    use std::fmt::Write as _;
    let mut s = String::with_capacity(bytes.len() * 2);
    for b in bytes {
        let _ = write!(s, "{b:02x}");
    }
    s
}

/// Decides which columns are characteristics from a sample of raw cells: numeric when more
/// than half of the non-missing cells read as numbers (a forced label stays a label).
pub(crate) fn classify(numeric: usize, text: usize, forced_label: bool) -> bool {
    !forced_label && (numeric > 0 && text * 2 < numeric + text || numeric == 0 && text == 0)
}

/// Loads the two lots of a comparison: two files, or one file split by a lot column.
/// Two files are read in parallel.
///
/// # Errors
/// Any file's [`LoadError`]; a wrong number of files for the split choice.
pub fn load_two(
    files: &[std::path::PathBuf],
    split_by: Option<&str>,
    lots: Option<[&str; 2]>,
    options: &LoadOptions,
) -> Result<[Lot; 2], LoadError> {
    match (files, split_by) {
        ([one], Some(column)) => {
            let mut opts = options.clone();
            if !opts
                .labels
                .iter()
                .any(|l| match_key(l) == match_key(column))
            {
                opts.labels.push(column.to_string());
            }
            let mut lot = load(one, &opts)?;
            // The record keeps the user's own label choices: the lot column is implied by the
            // split, so every way of splitting the file records the same.
            lot.provenance.forced_labels = options.labels.clone();
            split_lot(&lot, column, lots)
        }
        ([a, b], None) => {
            let (ra, rb) = rayon::join(|| load(a, options), || load(b, options));
            Ok([ra?, rb?])
        }
        ([one], None) => {
            let display = one.display().to_string();
            let table = load(one, options)?;
            let hint = lot_column_candidates(&table)
                .into_iter()
                .next()
                .map(|(column, values)| {
                    let shown: Vec<String> =
                        values.iter().take(5).map(|v| format!("\"{v}\"")).collect();
                    format!(
                        "; \"{column}\" looks like one (values {}{})",
                        shown.join(", "),
                        if values.len() > 5 { ", …" } else { "" }
                    )
                })
                .unwrap_or_else(|| {
                    "; no column with 2 to 50 distinct values looks like a lot column, so give \
                     the reference and the candidate lot files"
                        .into()
                });
            Err(LoadError::new(
                &display,
                LoadErrorKind::Invalid(format!(
                    "one file holds two lots only with a lot column: give --lot-column COLUMN{hint}"
                )),
            ))
        }
        ([a, _], Some(_)) => Err(LoadError::new(
            &a.display().to_string(),
            LoadErrorKind::LotValues {
                why: "a lot column splits one file; with two files leave out --lot-column".into(),
                values: Vec::new(),
            },
        )),
        _ => Err(LoadError::new(
            "",
            LoadErrorKind::Usage("give two lot files, or one file and a lot column".into()),
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn headers_carry_units() {
        assert_eq!(
            split_header("Bore (mm)"),
            ("Bore".into(), Some("mm".into()))
        );
        assert_eq!(
            split_header(" mass [g] "),
            ("mass".into(), Some("g".into()))
        );
        assert_eq!(split_header("plain"), ("plain".into(), None));
        assert_eq!(split_header("(mm)"), ("(mm)".into(), None));
    }

    #[test]
    fn letters_like_a_spreadsheet() {
        assert_eq!(column_letter(0), "A");
        assert_eq!(column_letter(25), "Z");
        assert_eq!(column_letter(26), "AA");
        assert_eq!(column_letter(701), "ZZ");
        assert_eq!(column_letter(702), "AAA");
    }

    #[test]
    fn cells() {
        assert_eq!(parse_cell(" 12.5 ", false), Cell::Number(12.5));
        assert_eq!(parse_cell("12,5", true), Cell::Number(12.5));
        assert_eq!(parse_cell("12,5", false), Cell::Text);
        assert_eq!(parse_cell("1.234,5", true), Cell::Text);
        assert_eq!(parse_cell("#N/A", false), Cell::Missing);
        assert_eq!(parse_cell("NaN", false), Cell::Missing);
        assert_eq!(parse_cell("-", false), Cell::Missing);
        assert_eq!(parse_cell("-inf", false), Cell::Infinite);
        assert_eq!(parse_cell("1e400", false), Cell::Infinite);
        assert_eq!(parse_cell("+3e-2", false), Cell::Number(0.03));
        assert_eq!(parse_cell("HB-001", false), Cell::Text);
        assert_eq!(match_key(" Bore  Diameter"), "borediameter");
    }

    #[test]
    fn fast_path_equals_the_standard_parser() {
        // Property: the fast path gives exactly what str::parse gives.
        let mut state = 12345u64;
        for _ in 0..20_000 {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let digits = (state >> 33) % 10_000_000_000;
            let frac = ((state >> 20) % 12) as usize;
            let s = format!("{digits}");
            let text = if frac > 0 && frac < s.len() {
                format!("{}.{}", &s[..s.len() - frac], &s[s.len() - frac..])
            } else {
                s
            };
            let want: f64 = text.parse().unwrap();
            assert_eq!(
                parse_cell_bytes(text.as_bytes(), false),
                Cell::Number(want),
                "{text}"
            );
            let neg = format!("-{text}");
            assert_eq!(
                parse_cell_bytes(neg.as_bytes(), false),
                Cell::Number(-want),
                "{neg}"
            );
        }
        assert_eq!(parse_cell_bytes(b" 12,5 ", true), Cell::Number(12.5));
        assert_eq!(parse_cell_bytes(b"12,5", false), Cell::Text);
        assert_eq!(parse_cell_bytes(b".5", false), Cell::Number(0.5));
        assert_eq!(parse_cell_bytes(b"5.", false), Cell::Number(5.0));
        assert_eq!(parse_cell_bytes(b"-", false), Cell::Missing);
        assert_eq!(parse_cell_bytes(b".", false), Cell::Text);
        assert_eq!(parse_cell_bytes(b"1e5", false), Cell::Number(1e5));
        assert_eq!(parse_cell_bytes(b"NA", false), Cell::Missing);
        assert_eq!(
            parse_cell_bytes(b"12345678901234567890", false),
            Cell::Number(12345678901234567890.0)
        );
    }
}
