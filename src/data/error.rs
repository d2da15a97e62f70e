//! Load and pairing errors: each names the file, and where it applies the row and column.

use super::column_letter;

/// What went wrong reading a file.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum LoadErrorKind {
    /// The file could not be read.
    Io(String),
    /// Nothing in the file.
    Empty,
    /// A header row and no data rows.
    HeaderOnly,
    /// A header cell too long to be a column name (the file is probably not a table).
    HeaderTooLong {
        /// Its length in bytes.
        length: usize,
    },
    /// A row with fewer fields than the header.
    Ragged {
        /// Fields in the row.
        found: usize,
        /// Fields in the header.
        expected: usize,
    },
    /// Two columns with the same name (ignoring case and spaces).
    DuplicateColumn {
        /// The other column's header and position.
        first: String,
    },
    /// Text in a numeric column.
    NotNumeric {
        /// The text found (cut to 80 characters).
        text: String,
    },
    /// An infinite or overflowing number.
    NotFinite {
        /// The text found.
        text: String,
    },
    /// Text in an encoding lotshift does not read.
    Encoding(String),
    /// Not a text table or spreadsheet.
    Binary,
    /// The requested sheet does not exist.
    NoSuchSheet {
        /// The sheet asked for.
        sheet: String,
        /// The sheets in the file.
        available: Vec<String>,
    },
    /// No sheet holds any data.
    NoData,
    /// The spreadsheet reader failed.
    Spreadsheet(String),
    /// The lot column named for splitting is not in the file.
    NoLotColumn {
        /// Columns in the file.
        available: Vec<String>,
    },
    /// Content that is well formed but not acceptable (a specification's limits or margins,
    /// an unknown characteristic); the text says what and why.
    Invalid(String),
    /// The files or options asked for do not make a comparison (no file is at fault).
    Usage(String),
    /// The lot column does not hold the two lots asked for.
    LotValues {
        /// What is wrong.
        why: String,
        /// Distinct values in the column, in order of appearance.
        values: Vec<String>,
    },
}

/// A file that could not be read, with the place in it.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}", self.describe())]
pub struct LoadError {
    /// The file, as given.
    pub file: String,
    /// Row as a spreadsheet shows it (header is row 1).
    pub row: Option<usize>,
    /// Column header.
    pub column: Option<String>,
    /// Column position, 0-based.
    pub position: Option<usize>,
    /// What went wrong.
    pub kind: LoadErrorKind,
    /// What a row number counts: `row` as a spreadsheet shows it (header is row 1), or a
    /// position from 1 in a query's result (`result row`) or a Parquet file (`data row`),
    /// where columns are named without spreadsheet letters.
    pub row_label: &'static str,
}

impl LoadError {
    /// An error about the whole file.
    pub fn new(file: &str, kind: LoadErrorKind) -> Self {
        LoadError {
            file: file.to_string(),
            row: None,
            column: None,
            position: None,
            kind,
            row_label: "row",
        }
    }

    /// An error at a row.
    pub fn at_row(file: &str, row: usize, kind: LoadErrorKind) -> Self {
        LoadError {
            row: Some(row),
            ..Self::new(file, kind)
        }
    }

    /// An error at a cell.
    pub fn at_cell(
        file: &str,
        row: usize,
        column: &str,
        position: usize,
        kind: LoadErrorKind,
    ) -> Self {
        LoadError {
            row: Some(row),
            column: Some(column.to_string()),
            position: Some(position),
            ..Self::new(file, kind)
        }
    }

    fn describe(&self) -> String {
        let mut place = self.file.clone();
        if let Some(r) = self.row {
            place.push_str(&format!(", {} {r}", self.row_label));
        }
        match (&self.column, self.position) {
            (Some(c), Some(p)) if self.row_label == "row" => {
                place.push_str(&format!(", column {} \"{c}\"", column_letter(p)))
            }
            (Some(c), _) if self.row_label != "row" => place.push_str(&format!(", column \"{c}\"")),
            _ => {}
        }
        let what = match &self.kind {
            LoadErrorKind::Io(e) => format!("cannot read the file: {e}"),
            LoadErrorKind::Empty => "the file is empty".into(),
            LoadErrorKind::HeaderOnly => "the file has a header row but no data rows".into(),
            LoadErrorKind::HeaderTooLong { length } => format!(
                "a header cell of {length} bytes cannot be a column name; is the first row a header?"
            ),
            LoadErrorKind::Ragged { found, expected } => format!(
                "the row has {found} field{} but the header has {expected}",
                if *found == 1 { "" } else { "s" }
            ),
            LoadErrorKind::DuplicateColumn { first } => {
                format!("the column name repeats {first}; column names must be unique")
            }
            LoadErrorKind::NotNumeric { text } => format!(
                "\"{}\" is not a number in a numeric column (missing values may be blank, \
                 NA, NaN, - or #N/A)",
                text
            ),
            LoadErrorKind::NotFinite { text } => {
                format!("\"{text}\" is not a finite number")
            }
            LoadErrorKind::Encoding(e) => format!("{e}; save the file as UTF-8 text"),
            LoadErrorKind::Binary => {
                "this is not a text table (CSV/TSV) or a spreadsheet lotshift can read".into()
            }
            LoadErrorKind::NoSuchSheet { sheet, available } => format!(
                "no sheet named \"{sheet}\"; the sheets are {}",
                available
                    .iter()
                    .map(|s| format!("\"{s}\""))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            LoadErrorKind::NoData => "no sheet holds any data".into(),
            LoadErrorKind::Spreadsheet(e) => format!("cannot read the spreadsheet: {e}"),
            LoadErrorKind::NoLotColumn { available } => format!(
                "no such lot column; the columns are {}",
                available
                    .iter()
                    .map(|s| format!("\"{s}\""))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            LoadErrorKind::Invalid(why) | LoadErrorKind::Usage(why) => why.clone(),
            LoadErrorKind::LotValues { why, values } if values.is_empty() => why.clone(),
            LoadErrorKind::LotValues { why, values } => format!(
                "{why}; the column holds {}",
                values
                    .iter()
                    .map(|s| format!("\"{s}\""))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        };
        if place.is_empty() {
            what
        } else {
            format!("{place}: {what}")
        }
    }
}

/// Cuts a text found in a file to 80 characters for a message.
pub fn shorten(text: &str) -> String {
    const MAX: usize = 80;
    if text.chars().count() <= MAX {
        text.to_string()
    } else {
        let cut: String = text.chars().take(MAX).collect();
        format!("{cut}… ({} characters)", text.chars().count())
    }
}

/// Two lots that cannot be put side by side.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PrepareError {
    /// No numeric column appears in both lots.
    #[error(
        "\"{0}\" and \"{1}\" have no numeric column in common (columns are matched by name, \
         ignoring case, spaces, hyphens, underscores and dots)"
    )]
    NoCommonColumns(String, String),
    /// A characteristic asked for is not a numeric column of both lots.
    #[error("characteristic \"{name}\" {why}")]
    UnknownCharacteristic {
        /// The name asked for.
        name: String,
        /// Where it is missing or not numeric.
        why: String,
    },
    /// The same characteristic in different units.
    #[error(
        "characteristic \"{name}\" is in {unit_a} in \"{file_a}\" but in {unit_b} in \
         \"{file_b}\"; convert one lot before comparing"
    )]
    UnitMismatch {
        /// Characteristic.
        name: String,
        /// Unit in the first lot.
        unit_a: String,
        /// Unit in the second lot.
        unit_b: String,
        /// First lot's file.
        file_a: String,
        /// Second lot's file.
        file_b: String,
    },
    /// Every characteristic was excluded.
    #[error("no characteristics left to compare")]
    NothingSelected,
    /// Numeric columns that are not compared, when every one must be.
    #[error(
        "{count} numeric {} not compared: {list} (--strict-columns makes this an error; \
         rename, exclude or read them as labels)",
        if *count == 1 { "column is" } else { "columns are" }
    )]
    NotCompared {
        /// How many.
        count: usize,
        /// Each with its lot and reason.
        list: String,
    },
}
