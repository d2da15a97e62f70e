//! One characteristic's row in the specification editor: its cells as typed (limits, target,
//! a symmetric or asymmetric margin), how a typed number reads, and each cell's problem.

use crate::data::match_key;
use crate::data::spec::SpecRow;

/// One characteristic's cells, as typed.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct EditRow {
    /// Matching key of the characteristic ([`match_key`]).
    pub key: String,
    /// Characteristic name (as the file or the lot writes it).
    pub characteristic: String,
    /// Unit written with the row (the file's, or the lots').
    pub unit: Option<String>,
    /// Lower specification limit.
    pub lower: String,
    /// Target.
    pub target: String,
    /// Upper specification limit.
    pub upper: String,
    /// The margin differs below and above.
    pub asymmetric: bool,
    /// Symmetric margin (± this much).
    pub margin: String,
    /// Asymmetric margin: how far the candidate mean may lie below the reference mean.
    pub below: String,
    /// Asymmetric margin: how far the candidate mean may lie above the reference mean.
    pub above: String,
}

/// A cell of a row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cell {
    /// Lower limit.
    Lower,
    /// Target.
    Target,
    /// Upper limit.
    Upper,
    /// Symmetric margin.
    Margin,
    /// Margin below.
    Below,
    /// Margin above.
    Above,
}

impl Cell {
    /// The cell's name in messages and for screen readers.
    pub fn words(self) -> &'static str {
        match self {
            Cell::Lower => "lower limit",
            Cell::Target => "target",
            Cell::Upper => "upper limit",
            Cell::Margin => "margin",
            Cell::Below => "margin below",
            Cell::Above => "margin above",
        }
    }
}

/// A row's values once every cell checks.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct RowValues {
    /// Lower limit.
    pub lower: Option<f64>,
    /// Target.
    pub target: Option<f64>,
    /// Upper limit.
    pub upper: Option<f64>,
    /// Allowed range of candidate − reference.
    pub margin: Option<[f64; 2]>,
}

impl RowValues {
    /// Nothing given.
    pub fn is_blank(&self) -> bool {
        self.lower.is_none()
            && self.target.is_none()
            && self.upper.is_none()
            && self.margin.is_none()
    }
}

/// Reads a typed number: blank is "not given"; a single comma is read as the decimal mark.
///
/// # Errors
/// Text that is not a finite number, in words.
pub fn parse_number(text: &str) -> Result<Option<f64>, String> {
    let t = text.trim();
    if t.is_empty() {
        return Ok(None);
    }
    let normal = if !t.contains('.') && t.matches(',').count() == 1 {
        t.replace(',', ".")
    } else {
        t.to_string()
    };
    match normal.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        _ => Err(format!("\"{t}\" is not a number")),
    }
}

/// A value as a cell shows it: the shortest text that reads back to the same number.
pub fn cell_text(v: Option<f64>) -> String {
    v.map_or_else(String::new, |x| format!("{x}"))
}

impl EditRow {
    /// An empty row for a characteristic.
    pub fn blank(name: &str, unit: Option<String>) -> Self {
        EditRow {
            key: match_key(name),
            characteristic: name.to_string(),
            unit,
            ..EditRow::default()
        }
    }

    /// The cells of a specification file's row.
    pub fn from_spec_row(r: &SpecRow) -> Self {
        let mut e = EditRow::blank(&r.characteristic, r.unit.clone());
        e.lower = cell_text(r.lower);
        e.target = cell_text(r.target);
        e.upper = cell_text(r.upper);
        match r.margin {
            Some([lo, hi]) if -lo == hi => e.margin = cell_text(Some(hi)),
            Some([lo, hi]) => {
                e.asymmetric = true;
                e.below = cell_text(Some(-lo));
                e.above = cell_text(Some(hi));
            }
            None => {}
        }
        e
    }

    /// Every cell blank.
    pub fn is_blank(&self) -> bool {
        [
            &self.lower,
            &self.target,
            &self.upper,
            &self.margin,
            &self.below,
            &self.above,
        ]
        .iter()
        .all(|t| t.trim().is_empty())
    }

    /// Switches between a symmetric and an asymmetric margin, keeping what was typed: both
    /// sides take the symmetric margin; the symmetric margin takes the smaller side.
    pub fn set_asymmetric(&mut self, asymmetric: bool) {
        if asymmetric == self.asymmetric {
            return;
        }
        if asymmetric {
            self.below = self.margin.clone();
            self.above = self.margin.clone();
        } else {
            self.margin = match (parse_number(&self.below), parse_number(&self.above)) {
                (Ok(Some(b)), Ok(Some(a))) => cell_text(Some(b.min(a))),
                (Ok(Some(_)), _) | (Ok(None), Ok(None)) | (Err(_), _) => self.below.clone(),
                (Ok(None), _) => self.above.clone(),
            };
        }
        self.asymmetric = asymmetric;
    }

    /// The row's values, or the problem of each cell that does not check: numbers that do
    /// not parse, a lower limit not below the upper one, a target outside the limits, a
    /// margin that is not positive, one side of an asymmetric margin without the other.
    ///
    /// # Errors
    /// The cells with a problem, each with the problem in words.
    pub fn check(&self) -> Result<RowValues, Vec<(Cell, String)>> {
        let mut problems = Vec::new();
        let mut read = |cell: Cell, text: &str| match parse_number(text) {
            Ok(v) => v,
            Err(e) => {
                problems.push((cell, e));
                None
            }
        };
        let lower = read(Cell::Lower, &self.lower);
        let target = read(Cell::Target, &self.target);
        let upper = read(Cell::Upper, &self.upper);
        let (margin, below, above) = if self.asymmetric {
            (
                None,
                read(Cell::Below, &self.below),
                read(Cell::Above, &self.above),
            )
        } else {
            (read(Cell::Margin, &self.margin), None, None)
        };
        if let (Some(l), Some(u)) = (lower, upper)
            && l >= u
        {
            problems.push((
                Cell::Upper,
                format!("must be above the lower limit {}", cell_text(Some(l))),
            ));
        }
        if let Some(t) = target
            && (lower.is_some_and(|l| t < l) || upper.is_some_and(|u| t > u))
        {
            problems.push((Cell::Target, "lies outside the limits".into()));
        }
        for (cell, v) in [
            (Cell::Margin, margin),
            (Cell::Below, below),
            (Cell::Above, above),
        ] {
            if v.is_some_and(|m| m <= 0.0) {
                problems.push((cell, "a margin must be above 0".into()));
            }
        }
        if self.asymmetric {
            let blank = |t: &str| t.trim().is_empty();
            if blank(&self.below) && !blank(&self.above) {
                problems.push((Cell::Below, "give both sides, or neither".into()));
            }
            if blank(&self.above) && !blank(&self.below) {
                problems.push((Cell::Above, "give both sides, or neither".into()));
            }
        }
        if !problems.is_empty() {
            return Err(problems);
        }
        let margin = match (margin, below, above) {
            (Some(m), _, _) => Some([-m, m]),
            (None, Some(b), Some(a)) => Some([-b, a]),
            _ => None,
        };
        Ok(RowValues {
            lower,
            target,
            upper,
            margin,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_parse_with_a_point_or_a_comma() {
        assert_eq!(parse_number(" 12.018 "), Ok(Some(12.018)));
        assert_eq!(parse_number("12,5"), Ok(Some(12.5)));
        assert_eq!(parse_number(""), Ok(None));
        assert!(parse_number("1,2,3").is_err());
        assert!(parse_number("inf").is_err());
        assert!(parse_number("abc").is_err());
        for v in [12.018, 0.1 + 0.2, 1e-7, 1.0 / 3.0] {
            assert_eq!(parse_number(&cell_text(Some(v))), Ok(Some(v)));
        }
    }

    #[test]
    fn each_bad_cell_is_named() {
        let mut r = EditRow::blank("mass", None);
        r.lower = "143".into();
        r.upper = "142".into();
        r.target = "150".into();
        r.margin = "-1".into();
        let p = r.check().unwrap_err();
        let cells: Vec<Cell> = p.iter().map(|(c, _)| *c).collect();
        assert!(cells.contains(&Cell::Upper) && cells.contains(&Cell::Target));
        assert!(cells.contains(&Cell::Margin));
        let mut r = EditRow::blank("mass", None);
        r.asymmetric = true;
        r.below = "0.2".into();
        assert_eq!(r.check().unwrap_err()[0].0, Cell::Above);
        r.above = "0.3".into();
        assert_eq!(r.check().unwrap().margin, Some([-0.2, 0.3]));
        r.set_asymmetric(false);
        assert_eq!(r.margin, "0.2", "the smaller side");
    }
}
