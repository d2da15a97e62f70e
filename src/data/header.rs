//! The header row, the same for every loader: a column's name and unit from its header cell,
//! the name of a blank header, repeated names, and the columns the user asked to read as
//! labels. The delimited and the spreadsheet loaders both go through [`Headers`].

use std::collections::HashMap;

use super::error::{LoadError, LoadErrorKind};
use super::{LoadOptions, column_letter, match_key, split_header};

/// The header cells seen so far in one file.
pub(crate) struct Headers {
    /// Match key of each name taken → (position, header text as written).
    seen: HashMap<String, (usize, String)>,
    /// Match keys of the columns to read as labels.
    forced: Vec<String>,
}

impl Headers {
    pub(crate) fn new(options: &LoadOptions) -> Self {
        Headers {
            seen: HashMap::new(),
            forced: options.labels.iter().map(|l| match_key(l)).collect(),
        }
    }

    /// Name and unit of the header cell `text` at 0-based `position`: `name (unit)` split, and
    /// a blank header named after its column letter.
    pub(crate) fn name(text: &str, position: usize) -> (String, Option<String>) {
        if text.is_empty() {
            (format!("column {}", column_letter(position)), None)
        } else {
            split_header(text)
        }
    }

    /// Takes `name` for the column at `position`.
    ///
    /// # Errors
    /// The name (by its match key) is already taken by another column: a
    /// [`LoadErrorKind::DuplicateColumn`] at the header cell, naming the first column.
    pub(crate) fn claim(
        &mut self,
        path: &str,
        header_row: usize,
        text: &str,
        name: &str,
        position: usize,
    ) -> Result<(), LoadError> {
        let key = match_key(name);
        if let Some((first, header)) = self.seen.get(&key) {
            return Err(LoadError::at_cell(
                path,
                header_row,
                text,
                position,
                LoadErrorKind::DuplicateColumn {
                    first: format!("column {} \"{}\"", column_letter(*first), header),
                },
            ));
        }
        self.seen.insert(key, (position, text.to_string()));
        Ok(())
    }

    /// True when the user asked to read this column (by name or by header text) as labels.
    pub(crate) fn forced_label(&self, name: &str, header: &str) -> bool {
        self.forced.contains(&match_key(name)) || self.forced.contains(&match_key(header))
    }
}
