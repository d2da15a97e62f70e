//! Specification files: per characteristic the specification limits (lower, target, upper)
//! and the equivalence margin of the quality plan, read by the same loaders as lot files.
//!
//! A specification is a table with one row per characteristic: a `characteristic` column
//! (names match lot columns as lot columns match each other: ignoring case and spaces, with an
//! optional unit in the name, `hub length (mm)`, or in a `unit` column) and any of `lower`,
//! `target`, `upper`, `margin` (symmetric), `margin_lower` / `margin_upper` (asymmetric:
//! how far the candidate lot's mean may lie below / above the reference lot's mean). Blank
//! cells mean "not given".

use std::path::Path;

use super::error::{LoadError, LoadErrorKind};
use super::{ColumnData, LoadOptions, Lot, load, match_key, split_header};

/// One characteristic's limits and margin as the specification file gives them.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SpecRow {
    /// Characteristic name as written in the file (without its unit).
    pub characteristic: String,
    /// Unit given in the file, if any.
    pub unit: Option<String>,
    /// Lower specification limit.
    pub lower: Option<f64>,
    /// Target (nominal) value.
    pub target: Option<f64>,
    /// Upper specification limit.
    pub upper: Option<f64>,
    /// Equivalence margin as the allowed range of candidate − reference: `[−below, above]`.
    pub margin: Option<[f64; 2]>,
    /// Row of the file (as a spreadsheet shows it), for messages.
    pub row: usize,
}

/// A specification file as read.
#[derive(Debug, Clone, PartialEq)]
pub struct Spec {
    /// The file, as given.
    pub path: String,
    /// File name without folders.
    pub file_name: String,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// One row per characteristic, in file order.
    pub rows: Vec<SpecRow>,
}

/// Column names a specification file may use (matched like lot columns).
const KNOWN: [&str; 8] = [
    "characteristic",
    "unit",
    "lower",
    "target",
    "upper",
    "margin",
    "margin_lower",
    "margin_upper",
];

/// Reads a specification file (CSV, TSV or spreadsheet).
///
/// # Errors
/// The loaders' errors, and for the content a [`LoadError`] naming the file, row and column:
/// a missing `characteristic` column, an unknown column, a repeated characteristic,
/// `lower >= upper`, a target outside the limits, a margin that is not positive.
pub fn load_spec(path: &Path, options: &LoadOptions) -> Result<Spec, LoadError> {
    // Every column but `characteristic` and `unit` is numeric; naming the text ones as
    // labels keeps a file whose limits are all blank from being misread.
    let options = LoadOptions {
        sheet: options.sheet.clone(),
        labels: vec!["characteristic".into(), "unit".into()],
    };
    let lot = load(path, &options)?;
    spec_from_lot(&lot)
}

/// Reads a specification from a table already loaded.
///
/// # Errors
/// As [`load_spec`].
pub fn spec_from_lot(lot: &Lot) -> Result<Spec, LoadError> {
    let file = lot.provenance.path.clone();
    let key = |s: &str| match_key(&s.replace(['_', '-'], ""));
    let find = |name: &str| lot.columns.iter().find(|c| key(&c.name) == key(name));
    for c in &lot.columns {
        if !KNOWN.iter().any(|k| key(k) == key(&c.name)) {
            return Err(LoadError::at_cell(
                &file,
                1,
                &c.header,
                c.position,
                LoadErrorKind::Invalid(format!(
                    "unknown column in a specification file; the columns are {}",
                    KNOWN.join(", ")
                )),
            ));
        }
    }
    let Some(names) = find("characteristic") else {
        return Err(LoadError::at_row(
            &file,
            1,
            LoadErrorKind::Invalid(
                "a specification file needs a \"characteristic\" column naming each \
                 characteristic"
                    .into(),
            ),
        ));
    };
    let number = |name: &str, i: usize| -> Result<Option<(f64, usize, String)>, LoadError> {
        let Some(c) = find(name) else { return Ok(None) };
        match &c.data {
            ColumnData::Numeric(v) => {
                Ok((!v[i].is_nan()).then(|| (v[i], c.position, c.header.clone())))
            }
            ColumnData::Text(t) => {
                let text = t.get(i).trim();
                if text.is_empty() {
                    Ok(None)
                } else {
                    Err(LoadError::at_cell(
                        &file,
                        lot.rows[i] as usize,
                        &c.header,
                        c.position,
                        LoadErrorKind::NotNumeric {
                            text: super::error::shorten(text),
                        },
                    ))
                }
            }
        }
    };
    let mut rows: Vec<SpecRow> = Vec::new();
    for i in 0..lot.len() {
        let row = lot.rows[i] as usize;
        let written = names.text(i);
        let (name, mut unit) = split_header(&written);
        if name.is_empty() {
            return Err(LoadError::at_cell(
                &file,
                row,
                &names.header,
                names.position,
                LoadErrorKind::Invalid("the characteristic name is blank".into()),
            ));
        }
        if let Some(u) = find("unit") {
            let text = u.text(i);
            if !text.trim().is_empty() {
                unit = Some(text.trim().to_string());
            }
        }
        if let Some(prev) = rows
            .iter()
            .find(|r| match_key(&r.characteristic) == match_key(&name))
        {
            return Err(LoadError::at_cell(
                &file,
                row,
                &names.header,
                names.position,
                LoadErrorKind::Invalid(format!(
                    "\"{name}\" is specified twice (also on row {})",
                    prev.row
                )),
            ));
        }
        let bad = |v: &(f64, usize, String), why: String| {
            LoadError::at_cell(&file, row, &v.2, v.1, LoadErrorKind::Invalid(why))
        };
        let lower = number("lower", i)?;
        let target = number("target", i)?;
        let upper = number("upper", i)?;
        if let (Some(l), Some(u)) = (&lower, &upper)
            && l.0 >= u.0
        {
            return Err(bad(
                u,
                format!(
                    "the upper limit {} is not above the lower limit {}",
                    u.0, l.0
                ),
            ));
        }
        if let Some(t) = &target
            && (lower.as_ref().is_some_and(|l| t.0 < l.0)
                || upper.as_ref().is_some_and(|u| t.0 > u.0))
        {
            return Err(bad(
                t,
                format!("the target {} lies outside the limits", t.0),
            ));
        }
        let positive = |v: &Option<(f64, usize, String)>| -> Result<Option<f64>, LoadError> {
            match v {
                Some(m) if m.0 <= 0.0 => {
                    Err(bad(m, format!("a margin must be positive (got {})", m.0)))
                }
                Some(m) => Ok(Some(m.0)),
                None => Ok(None),
            }
        };
        let symmetric = number("margin", i)?;
        let below = number("margin_lower", i)?;
        let above = number("margin_upper", i)?;
        let margin = match (positive(&symmetric)?, positive(&below)?, positive(&above)?) {
            (Some(_), Some(_), _) | (Some(_), _, Some(_)) => {
                let m = symmetric.as_ref().unwrap_or_else(|| unreachable!());
                return Err(bad(
                    m,
                    "give either margin or margin_lower and margin_upper, not both".into(),
                ));
            }
            (Some(m), None, None) => Some([-m, m]),
            (None, Some(b), Some(a)) => Some([-b, a]),
            (None, Some(_), None) | (None, None, Some(_)) => {
                let m = below
                    .as_ref()
                    .or(above.as_ref())
                    .unwrap_or_else(|| unreachable!());
                return Err(bad(
                    m,
                    "an asymmetric margin needs both margin_lower and margin_upper".into(),
                ));
            }
            (None, None, None) => None,
        };
        rows.push(SpecRow {
            characteristic: name,
            unit,
            lower: lower.map(|v| v.0),
            target: target.map(|v| v.0),
            upper: upper.map(|v| v.0),
            margin,
            row,
        });
    }
    Ok(Spec {
        path: file,
        file_name: lot.provenance.file_name.clone(),
        sha256: lot.provenance.sha256.clone(),
        rows,
    })
}

/// Writes specification rows as a CSV file that [`load_spec`] reads back to the same rows
/// (with `row` numbered as the file's lines: the first characteristic on row 2): the columns
/// `characteristic, unit, lower, target, upper, margin, margin_lower, margin_upper`, a
/// symmetric margin in `margin` and an asymmetric one in `margin_lower` / `margin_upper`,
/// blank cells for values not given, numbers in the shortest form that reads back to the
/// same `f64`, lines ending in `\n`. The values are expected to be finite. No rows give a
/// header only, which [`load_spec`] refuses as a file without rows.
pub fn to_csv(rows: &[SpecRow]) -> String {
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    let number = |v: Option<f64>| v.map_or_else(String::new, |x| format!("{x}"));
    // Writing to memory cannot fail.
    let _ = w.write_record(KNOWN);
    for r in rows {
        let (symmetric, below, above) = match r.margin {
            Some([lo, hi]) if -lo == hi => (Some(hi), None, None),
            Some([lo, hi]) => (None, Some(-lo), Some(hi)),
            None => (None, None, None),
        };
        let _ = w.write_record([
            r.characteristic.clone(),
            r.unit.clone().unwrap_or_default(),
            number(r.lower),
            number(r.target),
            number(r.upper),
            number(symmetric),
            number(below),
            number(above),
        ]);
    }
    let bytes = w.into_inner().unwrap_or_default();
    String::from_utf8(bytes).unwrap_or_default()
}

impl Spec {
    /// Lines the specification up with the compared characteristics: one entry per
    /// characteristic (`None` where the file says nothing about it).
    ///
    /// # Errors
    /// A row naming a characteristic that is not compared (with the nearest compared name),
    /// or a unit that disagrees with the lot files' unit.
    pub fn align(
        &self,
        characteristics: &[String],
        units: &[Option<String>],
    ) -> Result<Vec<Option<SpecRow>>, LoadError> {
        let mut out = vec![None; characteristics.len()];
        for r in &self.rows {
            let Some(k) = characteristics
                .iter()
                .position(|c| match_key(c) == match_key(&r.characteristic))
            else {
                let nearest = nearest(&r.characteristic, characteristics);
                return Err(LoadError::at_row(
                    &self.path,
                    r.row,
                    LoadErrorKind::Invalid(format!(
                        "\"{}\" is not a compared characteristic{}",
                        r.characteristic,
                        nearest
                            .map(|n| format!(" (did you mean \"{n}\"?)"))
                            .unwrap_or_default()
                    )),
                ));
            };
            if let (Some(su), Some(Some(lu))) = (&r.unit, units.get(k))
                && match_key(su) != match_key(lu)
            {
                return Err(LoadError::at_row(
                    &self.path,
                    r.row,
                    LoadErrorKind::Invalid(format!(
                        "\"{}\" is in {su} here but in {lu} in the lot files",
                        r.characteristic
                    )),
                ));
            }
            out[k] = Some(r.clone());
        }
        Ok(out)
    }
}

/// The compared name closest to `name` by edit distance on the matching keys, when it is
/// close enough to be a likely slip (at most a third of the name's length).
pub fn nearest<'a>(name: &str, candidates: &'a [String]) -> Option<&'a str> {
    let key = match_key(name);
    candidates
        .iter()
        .map(|c| (edit_distance(&key, &match_key(c)), c))
        .filter(|(d, _)| *d * 3 <= key.chars().count().max(3))
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c.as_str())
}

/// Levenshtein distance between two strings (by characters).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != *cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::load_bytes;

    fn spec(text: &str) -> Result<Spec, LoadError> {
        let options = LoadOptions {
            sheet: None,
            labels: vec!["characteristic".into(), "unit".into()],
        };
        spec_from_lot(&load_bytes("spec.csv", text.as_bytes(), &options)?)
    }

    #[test]
    fn reads_limits_and_both_kinds_of_margin() {
        let s = spec(
            "characteristic,lower,target,upper,margin,margin_lower,margin_upper\n\
             hub length (mm),27.9,28,28.1,0.02,,\n\
             mass,140.5,142,143.5,,0.2,0.3\n\
             bore diameter,,,12.018,,,\n",
        )
        .unwrap();
        assert_eq!(s.rows.len(), 3);
        assert_eq!(s.rows[0].unit.as_deref(), Some("mm"));
        assert_eq!(s.rows[0].margin, Some([-0.02, 0.02]));
        assert_eq!(s.rows[1].margin, Some([-0.2, 0.3]));
        assert_eq!(s.rows[2].lower, None);
        assert_eq!(s.rows[2].upper, Some(12.018));
        assert_eq!(s.rows[2].row, 4);
    }

    #[test]
    fn bad_content_names_file_row_and_column() {
        let e = spec("characteristic,lower,upper\nmass,143,142\n").unwrap_err();
        assert_eq!((e.row, e.column.as_deref()), (Some(2), Some("upper")));
        assert!(e.to_string().contains("not above the lower limit"), "{e}");
        let e = spec("characteristic,margin\nmass,-1\n").unwrap_err();
        assert!(
            e.to_string()
                .contains("spec.csv, row 2, column B \"margin\""),
            "{e}"
        );
        let e = spec("characteristic,margin,margin_lower\nmass,1,2\n").unwrap_err();
        assert!(e.to_string().contains("not both"), "{e}");
        let e = spec("characteristic,margin_lower\nmass,1\n").unwrap_err();
        assert!(e.to_string().contains("needs both"), "{e}");
        let e = spec("characteristic,tolerance\nmass,1\n").unwrap_err();
        assert!(e.to_string().contains("unknown column"), "{e}");
        let e = spec("lower,upper\n1,2\n").unwrap_err();
        assert!(e.to_string().contains("\"characteristic\" column"), "{e}");
        let e = spec("characteristic,lower\nmass,1\nMass,2\n").unwrap_err();
        assert!(e.to_string().contains("twice (also on row 2)"), "{e}");
        let e = spec("characteristic,lower,target,upper\nmass,1,5,3\n").unwrap_err();
        assert!(e.to_string().contains("outside the limits"), "{e}");
    }

    #[test]
    fn aligns_with_the_compared_characteristics() {
        let s = spec("characteristic,unit,margin\nhub length,mm,0.02\n").unwrap();
        let names = vec!["bore diameter".to_string(), "hub length".to_string()];
        let units = vec![Some("mm".to_string()), Some("mm".to_string())];
        let a = s.align(&names, &units).unwrap();
        assert!(a[0].is_none() && a[1].is_some());
        let wrong_unit = vec![Some("mm".to_string()), Some("in".to_string())];
        let e = s.align(&names, &wrong_unit).unwrap_err();
        assert!(e.to_string().contains("in mm here but in in"), "{e}");
        let s = spec("characteristic,margin\nhub lenght,0.02\n").unwrap();
        let e = s.align(&names, &units).unwrap_err();
        assert!(e.to_string().contains("did you mean \"hub length\""), "{e}");
    }

    #[test]
    fn written_rows_read_back_the_same() {
        let row = |k: usize, name: &str, unit: Option<&str>, v: [Option<f64>; 3], m| SpecRow {
            characteristic: name.into(),
            unit: unit.map(str::to_string),
            lower: v[0],
            target: v[1],
            upper: v[2],
            margin: m,
            row: k + 2,
        };
        let rows = vec![
            row(
                0,
                "bore diameter",
                Some("mm"),
                [Some(11.982), Some(12.0), Some(12.018)],
                Some([-0.005, 0.005]),
            ),
            row(
                1,
                "mass",
                Some("g"),
                [Some(140.5), None, Some(143.5)],
                Some([-0.2, 0.3]),
            ),
            row(2, "flatness, top face", None, [None, None, Some(0.1)], None),
            row(
                3,
                "\"odd\" name",
                Some("µm"),
                [Some(-1e-7), Some(0.1 + 0.2), Some(1e21)],
                Some([-1.0 / 3.0, 1.0 / 3.0]),
            ),
            row(4, "blank", None, [None, None, None], None),
        ];
        let text = to_csv(&rows);
        assert!(text.starts_with(
            "characteristic,unit,lower,target,upper,margin,margin_lower,margin_upper\n"
        ));
        let back = spec(&text).unwrap();
        assert_eq!(back.rows, rows, "{text}");
        // The same rows write the same bytes (the SHA-256 of an edited specification).
        assert_eq!(to_csv(&back.rows), text);
        // No rows: a header only, which the loader refuses (the window saves no empty file).
        assert!(spec(&to_csv(&[])).is_err());
    }

    #[test]
    fn edit_distance_is_levenshtein() {
        // Levenshtein (1966): kitten → sitting needs 3 edits; a classic textbook example.
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("same", "same"), 0);
    }
}
