//! The specification as edited in the window: per characteristic the specification limits
//! (lower, target, upper) and the equivalence margin (symmetric, or different below and
//! above), the margin rule for characteristics without one, and the margin on the distance
//! between the lot means; checked cell by cell, and turned into the [`SpecRequest`] a run
//! applies.
//!
//! What is applied is a [`Spec`]: the loaded or saved file itself while the cells still say
//! what it says, else the cells as edited, named [`EDITED`] and identified by the SHA-256 of
//! their [`to_csv`] form, so that the record's name and SHA-256 always match a file (the one
//! loaded, or the one the edits are saved to).

use crate::analysis::decision::MarginRule;
use crate::data::match_key;
use crate::data::spec::{Spec, SpecRow, to_csv};
use crate::pipeline::SpecRequest;

use super::spec_cells::{EditRow, parse_number};
use super::words::EDITED;
use super::worker::sha256_hex;

/// How characteristics without a margin in the table get one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum RuleChoice {
    /// Only the margins in the table.
    #[default]
    FileOnly,
    /// A fraction of the tolerance width.
    ToleranceFraction,
    /// A multiple of the reference lot's standard deviation.
    ReferenceSd,
}

/// The specification as edited in the window.
#[derive(Debug, Clone, Default)]
pub struct SpecEditor {
    /// One row per characteristic seen (compared now or not).
    pub rows: Vec<EditRow>,
    /// Margin rule.
    pub rule: RuleChoice,
    /// Factor of the tolerance-width rule, as typed.
    pub fraction: String,
    /// Factor of the reference-SD rule, as typed.
    pub sd: String,
    /// Margin on the distance between the lot means, as typed (blank: none).
    pub distance: String,
    /// The file last loaded or saved, as read or written.
    pub source: Option<Spec>,
}

/// A compared characteristic: name and unit.
pub type Characteristic = (String, Option<String>);

/// A row's content: characteristic key, unit, lower / target / upper, margin.
type RowContent = (String, Option<String>, [Option<f64>; 3], Option<[f64; 2]>);

/// Content of a row for comparing specifications: everything but the file row number.
fn content(r: &SpecRow) -> RowContent {
    (
        match_key(&r.characteristic),
        r.unit.clone(),
        [r.lower, r.target, r.upper],
        r.margin,
    )
}

fn is_blank_row(r: &SpecRow) -> bool {
    r.lower.is_none() && r.target.is_none() && r.upper.is_none() && r.margin.is_none()
}

impl SpecEditor {
    /// The row of a characteristic.
    pub fn row(&self, name: &str) -> Option<&EditRow> {
        let key = match_key(name);
        self.rows.iter().find(|r| r.key == key)
    }

    /// Adds an empty row for each characteristic that has none.
    pub fn ensure(&mut self, characteristics: &[Characteristic]) {
        for (name, unit) in characteristics {
            if self.row(name).is_none() {
                self.rows.push(EditRow::blank(name, unit.clone()));
            }
        }
    }

    /// Replaces every limit and margin by a file's (the rule and the distance margin stay).
    pub fn load(&mut self, spec: Spec) {
        for r in &mut self.rows {
            *r = EditRow::blank(&r.characteristic, r.unit.clone());
        }
        for s in &spec.rows {
            let e = EditRow::from_spec_row(s);
            match self.rows.iter_mut().find(|r| r.key == e.key) {
                Some(r) => *r = e,
                None => self.rows.push(e),
            }
        }
        self.source = Some(spec);
    }

    /// Empties every cell of the table.
    pub fn clear(&mut self) {
        for r in &mut self.rows {
            *r = EditRow::blank(&r.characteristic, r.unit.clone());
        }
    }

    /// The margin rule.
    ///
    /// # Errors
    /// A factor that is blank, not a number, or out of range.
    pub fn rule(&self) -> Result<MarginRule, String> {
        let factor = |text: &str| match parse_number(text)? {
            None => Err("type the factor the quality plan gives".to_string()),
            Some(v) => Ok(v),
        };
        match self.rule {
            RuleChoice::FileOnly => Ok(MarginRule::FileOnly),
            RuleChoice::ToleranceFraction => {
                let f = factor(&self.fraction)?;
                if f > 0.0 && f <= 1.0 {
                    Ok(MarginRule::ToleranceFraction(f))
                } else {
                    Err("a fraction must lie above 0 and at most 1".into())
                }
            }
            RuleChoice::ReferenceSd => {
                let k = factor(&self.sd)?;
                if k > 0.0 {
                    Ok(MarginRule::ReferenceSd(k))
                } else {
                    Err("the multiple must be above 0".into())
                }
            }
        }
    }

    /// The margin on the distance between the lot means.
    ///
    /// # Errors
    /// Not a number, or not above zero.
    pub fn distance_margin(&self) -> Result<Option<f64>, String> {
        match parse_number(&self.distance)? {
            Some(e) if e <= 0.0 => Err("a margin must be above 0".into()),
            v => Ok(v),
        }
    }

    /// The rows of the compared characteristics that say something, in their order, numbered
    /// as [`to_csv`] writes them.
    ///
    /// # Errors
    /// Every problem of those rows, as "characteristic, cell: problem".
    pub fn rows_for(&self, compared: &[Characteristic]) -> Result<Vec<SpecRow>, Vec<String>> {
        let mut rows = Vec::new();
        let mut problems = Vec::new();
        for (name, _) in compared {
            let Some(e) = self.row(name) else { continue };
            match e.check() {
                Err(ps) => problems.extend(
                    ps.into_iter()
                        .map(|(c, p)| format!("{}, {}: {p}", e.characteristic, c.words())),
                ),
                Ok(v) if v.is_blank() => {}
                Ok(v) => rows.push(SpecRow {
                    characteristic: e.characteristic.clone(),
                    unit: e.unit.clone(),
                    lower: v.lower,
                    target: v.target,
                    upper: v.upper,
                    margin: v.margin,
                    row: rows.len() + 2,
                }),
            }
        }
        if problems.is_empty() {
            Ok(rows)
        } else {
            Err(problems)
        }
    }

    /// The rows to save as a specification file.
    ///
    /// # Errors
    /// The table is empty, or cells have problems: the message saying so.
    pub fn rows_to_save(&self, compared: &[Characteristic]) -> Result<Vec<SpecRow>, String> {
        match self.rows_for(compared) {
            Ok(r) if !r.is_empty() => Ok(r),
            Ok(_) => Err("The specification table is empty: there is nothing to save.".into()),
            Err(problems) => Err(format!(
                "The specification was not saved: fix {} first.",
                problems.join("; ")
            )),
        }
    }

    /// The file name a save dialog suggests: the loaded or saved CSV file's, else
    /// `specification.csv`.
    pub fn save_name(&self) -> String {
        self.source
            .as_ref()
            .map(|s| s.file_name.clone())
            .filter(|n| n != EDITED && n.to_ascii_lowercase().ends_with(".csv"))
            .unwrap_or_else(|| "specification.csv".into())
    }

    /// The specification to apply to the compared characteristics: the loaded or saved file
    /// as it is while the cells say what it says (and it names only compared
    /// characteristics), else the cells as edited ([`EDITED`], SHA-256 of their CSV form);
    /// none when no cell is filled.
    ///
    /// # Errors
    /// Every problem of the compared rows, the rule factor and the distance margin.
    pub fn request(&self, compared: &[Characteristic]) -> Result<SpecRequest, Vec<String>> {
        let rows = self.rows_for(compared);
        let rule = self.rule();
        let distance = self.distance_margin();
        let mut problems = rows.as_ref().err().cloned().unwrap_or_default();
        if let Err(e) = &rule {
            problems.push(format!("margin rule: {e}"));
        }
        if let Err(e) = &distance {
            problems.push(format!("distance margin: {e}"));
        }
        let (Ok(rows), Ok(rule), Ok(distance_margin)) = (rows, rule, distance) else {
            return Err(problems);
        };
        Ok(SpecRequest {
            file: self.identify(rows, compared),
            rule,
            distance_margin,
            recorded: None,
        })
    }

    fn identify(&self, rows: Vec<SpecRow>, compared: &[Characteristic]) -> Option<Spec> {
        if let Some(src) = &self.source {
            let all_compared = src.rows.iter().all(|r| {
                compared
                    .iter()
                    .any(|(n, _)| match_key(n) == match_key(&r.characteristic))
            });
            let mut a: Vec<_> = src
                .rows
                .iter()
                .filter(|r| !is_blank_row(r))
                .map(content)
                .collect();
            let mut b: Vec<_> = rows.iter().map(content).collect();
            a.sort_by(|x, y| x.0.cmp(&y.0));
            b.sort_by(|x, y| x.0.cmp(&y.0));
            if all_compared && a == b && !src.rows.is_empty() {
                return Some(src.clone());
            }
        }
        if rows.is_empty() {
            return None;
        }
        Some(Spec {
            path: EDITED.into(),
            file_name: EDITED.into(),
            sha256: sha256_hex(to_csv(&rows).as_bytes()),
            rows,
        })
    }
}

/// Whether a specification file fits the characteristics both lots have (`matched`; none
/// yet: it fits).
///
/// # Errors
/// The loader's check ([`Spec::align`]): a characteristic the lots do not have, a unit that
/// differs.
pub fn fits(spec: &Spec, matched: Vec<Characteristic>) -> Result<(), String> {
    if matched.is_empty() {
        return Ok(());
    }
    let (names, units): (Vec<String>, Vec<Option<String>>) = matched.into_iter().unzip();
    spec.align(&names, &units)
        .map(|_| ())
        .map_err(|e| e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn compared() -> Vec<Characteristic> {
        vec![
            ("hub length".into(), Some("mm".into())),
            ("mass".into(), Some("g".into())),
        ]
    }

    fn spec_file() -> Spec {
        let row = |k: usize, name: &str, unit: &str, v: [f64; 3], m: f64| SpecRow {
            characteristic: name.into(),
            unit: Some(unit.into()),
            lower: Some(v[0]),
            target: Some(v[1]),
            upper: Some(v[2]),
            margin: Some([-m, m]),
            row: k + 2,
        };
        Spec {
            path: "/plans/hub-spec.csv".into(),
            file_name: "hub-spec.csv".into(),
            sha256: "ab".repeat(32),
            rows: vec![
                row(0, "hub length", "mm", [27.9, 28.0, 28.1], 0.03),
                row(1, "mass", "g", [140.5, 142.0, 143.5], 0.45),
            ],
        }
    }

    #[test]
    fn an_unedited_file_is_applied_as_the_file_and_an_edit_is_named_by_its_csv() {
        let mut ed = SpecEditor::default();
        ed.ensure(&compared());
        ed.load(spec_file());
        let req = ed.request(&compared()).unwrap();
        assert_eq!(req.file.as_ref(), Some(&spec_file()));
        // An edit: the file name and SHA-256 of the cells' CSV form.
        ed.rows[0].upper = "28.2".into();
        let req = ed.request(&compared()).unwrap();
        let f = req.file.unwrap();
        assert_eq!(f.file_name, EDITED);
        assert_eq!(f.sha256, sha256_hex(to_csv(&f.rows).as_bytes()));
        assert_eq!(f.rows[0].upper, Some(28.2));
        // Typing the old value back gives the file again.
        ed.rows[0].upper = "28.1".into();
        assert_eq!(ed.request(&compared()).unwrap().file, Some(spec_file()));
        // A characteristic the file specifies is no longer compared: the file is not what is
        // applied any more.
        let fewer = &compared()[..1];
        let f = ed.request(fewer).unwrap().file.unwrap();
        assert_eq!(f.file_name, EDITED);
        assert_eq!(f.rows.len(), 1);
    }

    #[test]
    fn problems_block_the_request() {
        let mut ed = SpecEditor::default();
        ed.ensure(&compared());
        assert_eq!(ed.request(&compared()).unwrap(), SpecRequest::default());
        ed.rows[1].lower = "abc".into();
        let e = ed.request(&compared()).unwrap_err();
        assert_eq!(
            e,
            vec!["mass, lower limit: \"abc\" is not a number".to_string()]
        );
        ed.rows[1].lower.clear();
        ed.rule = RuleChoice::ToleranceFraction;
        assert!(ed.request(&compared()).is_err(), "no factor typed");
        ed.fraction = "0.1".into();
        assert_eq!(
            ed.request(&compared()).unwrap().rule,
            MarginRule::ToleranceFraction(0.1)
        );
        ed.distance = "0".into();
        assert!(ed.request(&compared()).is_err());
    }
}
