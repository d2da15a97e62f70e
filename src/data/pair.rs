//! Putting two lots side by side: match columns by name, pick the characteristics, drop
//! incomplete units (listwise) and build the unit matrices the engine works on.

use nalgebra::DMatrix;

use super::{ColumnData, Lot, PrepareError, match_key};

/// Which characteristics to compare.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Selection {
    /// Compare exactly these (by name); `None` means every numeric column in both lots.
    pub only: Option<Vec<String>>,
    /// Leave these out.
    pub exclude: Vec<String>,
}

/// A column that is not compared, and why.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Unmatched {
    /// Lot (0 or 1) the column is in.
    pub lot: usize,
    /// Column header.
    pub column: String,
    /// Why it is left out.
    pub why: String,
}

/// Two columns paired although their headers are written differently (`hub-length` with
/// `hub length`): reported so the pairing can be checked.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Pairing {
    /// The reference lot's header.
    pub reference: String,
    /// The candidate lot's header.
    pub candidate: String,
}

impl Unmatched {
    /// True when the column was left out by the user's choice (not selected, excluded),
    /// false when it was left out because the lots do not line up.
    pub fn chosen(&self) -> bool {
        self.why == "not selected" || self.why == "excluded"
    }
}

/// One lot ready for the engine.
#[derive(Debug, Clone, PartialEq)]
pub struct PreparedLot {
    /// Display name.
    pub name: String,
    /// `n × p` complete units.
    pub data: DMatrix<f64>,
    /// Index of each kept unit in the lot as read.
    pub kept: Vec<usize>,
    /// Units read.
    pub n_read: usize,
    /// Units left out for a missing cell in a compared characteristic.
    pub n_excluded: usize,
    /// Missing cells per compared characteristic.
    pub missing: Vec<usize>,
    /// The units left out, each with its row and labels.
    pub left_out: Vec<LeftOut>,
}

/// A unit left out for a missing cell in a compared characteristic.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LeftOut {
    /// Row as a spreadsheet shows it (header row 1).
    pub row: u32,
    /// The unit's labels: `[header, value]` of each text column.
    pub labels: Vec<(String, String)>,
    /// The compared characteristics whose cell is missing.
    pub missing: Vec<String>,
}

impl LeftOut {
    /// `row 19 (serial HX40-A-0018; missing mass)`.
    pub fn describe(&self) -> String {
        let mut parts: Vec<String> = label_text(&self.labels).into_iter().collect();
        parts.push(format!("missing {}", self.missing.join(", ")));
        format!("row {} ({})", self.row, parts.join("; "))
    }
}

/// A unit's first two non-empty labels as `serial HX40-A-0018; measured at …` (`None` when it
/// has none): how every output names a unit.
pub fn label_text(labels: &[(String, String)]) -> Option<String> {
    let shown: Vec<String> = labels
        .iter()
        .filter(|(_, v)| !v.is_empty())
        .take(2)
        .map(|(h, v)| format!("{h} {v}"))
        .collect();
    (!shown.is_empty()).then(|| shown.join("; "))
}

/// Two lots ready for the engine.
#[derive(Debug, Clone, PartialEq)]
pub struct Prepared {
    /// Compared characteristics, in the first lot's column order.
    pub characteristics: Vec<String>,
    /// Their units.
    pub units: Vec<Option<String>>,
    /// The two lots.
    pub lots: [PreparedLot; 2],
    /// Columns not compared, with the reason.
    pub unmatched: Vec<Unmatched>,
    /// Compared columns whose headers are written differently in the two lots.
    pub pairings: Vec<Pairing>,
    /// Units set aside with a reason before the comparison (not in `lots`).
    pub exclusions: Vec<super::exclusions::Exclusion>,
}

impl Prepared {
    /// The numeric columns left out because the lots do not line up (not the ones the user
    /// excluded or did not select), as `"header" (lot N: why)`.
    pub fn not_compared(&self) -> Vec<String> {
        self.unmatched
            .iter()
            .filter(|u| !u.chosen())
            .map(|u| format!("\"{}\" (lot {}: {})", u.column, u.lot + 1, u.why))
            .collect()
    }
}

/// The matched columns, before any number is copied.
struct Plan {
    characteristics: Vec<String>,
    units: Vec<Option<String>>,
    unmatched: Vec<Unmatched>,
    pairings: Vec<Pairing>,
    /// Column indices in the first and the second lot.
    pairs: Vec<(usize, usize)>,
}

/// The column of `other` paired with `c`: numeric, with the same match key
/// ([`match_key`]; a lot never holds two columns with one key, the loaders refuse it). The
/// rule [`prepare`] pairs columns by, for callers that show the pairing before any number is
/// copied (the window's column list).
pub fn counterpart<'a>(other: &'a Lot, c: &super::Column) -> Option<&'a super::Column> {
    let key = match_key(&c.name);
    other
        .columns
        .iter()
        .find(|x| x.is_numeric() && match_key(&x.name) == key)
}

/// Matches the lots' columns and builds the unit matrices.
///
/// # Errors
/// No column in common, a requested characteristic that is not numeric in both lots,
/// conflicting units, or nothing left after exclusions.
pub fn prepare(a: &Lot, b: &Lot, selection: &Selection) -> Result<Prepared, PrepareError> {
    let plan = plan(a, b, selection)?;
    let idx_a: Vec<usize> = plan.pairs.iter().map(|p| p.0).collect();
    let idx_b: Vec<usize> = plan.pairs.iter().map(|p| p.1).collect();
    Ok(Prepared {
        characteristics: plan.characteristics,
        units: plan.units,
        lots: [build(a, &idx_a), build(b, &idx_b)],
        unmatched: plan.unmatched,
        pairings: plan.pairings,
        exclusions: Vec::new(),
    })
}

/// As [`prepare`], but frees each numeric column of the lots as soon as it is copied into the
/// unit matrices, so memory never holds the numbers twice (the command line's path for big
/// lots). The lots keep their labels, rows and provenance.
///
/// # Errors
/// As [`prepare`].
pub fn prepare_releasing(
    lots: &mut [Lot; 2],
    selection: &Selection,
) -> Result<Prepared, PrepareError> {
    let plan = plan(&lots[0], &lots[1], selection)?;
    let idx_a: Vec<usize> = plan.pairs.iter().map(|p| p.0).collect();
    let idx_b: Vec<usize> = plan.pairs.iter().map(|p| p.1).collect();
    let [a, b] = lots;
    let (first, second) = rayon::join(|| build_releasing(a, &idx_a), || build_releasing(b, &idx_b));
    Ok(Prepared {
        characteristics: plan.characteristics,
        units: plan.units,
        lots: [first, second],
        unmatched: plan.unmatched,
        pairings: plan.pairings,
        exclusions: Vec::new(),
    })
}

fn plan(a: &Lot, b: &Lot, selection: &Selection) -> Result<Plan, PrepareError> {
    let lots = [a, b];
    let mut unmatched = Vec::new();
    // Pairs of column indices of numeric columns present in both lots.
    let mut pairs: Vec<(usize, usize)> = Vec::new();
    let keys_b: std::collections::HashMap<String, usize> = b
        .columns
        .iter()
        .enumerate()
        .map(|(i, c)| (match_key(&c.name), i))
        .collect();
    let keys_a: std::collections::HashMap<String, usize> = a
        .columns
        .iter()
        .enumerate()
        .map(|(i, c)| (match_key(&c.name), i))
        .collect();
    for (ia, ca) in a.columns.iter().enumerate() {
        let key = match_key(&ca.name);
        let found = keys_b.get(&key).copied();
        match (found, ca.is_numeric()) {
            (Some(ib), true) if b.columns[ib].is_numeric() => pairs.push((ia, ib)),
            (Some(ib), true) => unmatched.push(Unmatched {
                lot: 0,
                column: ca.header.clone(),
                why: format!("numeric here but text in \"{}\"", b.columns[ib].header),
            }),
            (None, true) => unmatched.push(Unmatched {
                lot: 0,
                column: ca.header.clone(),
                why: "not in the other lot".into(),
            }),
            _ => {}
        }
    }
    for cb in &b.columns {
        let key = match_key(&cb.name);
        let found = keys_a.get(&key).map(|&i| &a.columns[i]);
        match found {
            None if cb.is_numeric() => unmatched.push(Unmatched {
                lot: 1,
                column: cb.header.clone(),
                why: "not in the other lot".into(),
            }),
            Some(ca) if cb.is_numeric() && !ca.is_numeric() => unmatched.push(Unmatched {
                lot: 1,
                column: cb.header.clone(),
                why: format!("numeric here but text in \"{}\"", ca.header),
            }),
            _ => {}
        }
    }
    // For a column in one lot only, the nearest name among the other lot's unmatched numeric
    // columns: most often the same characteristic written differently.
    let lone: [Vec<String>; 2] = [0, 1].map(|g| {
        unmatched
            .iter()
            .filter(|u| u.lot == g && u.why == "not in the other lot")
            .map(|u| u.column.clone())
            .collect()
    });
    for u in &mut unmatched {
        if u.why == "not in the other lot"
            && let Some(n) = super::spec::nearest(&u.column, &lone[1 - u.lot])
        {
            u.why = format!("not in the other lot; nearest there: \"{n}\"");
        }
    }
    if pairs.is_empty() {
        return Err(PrepareError::NoCommonColumns(
            a.provenance.file_name.clone(),
            b.provenance.file_name.clone(),
        ));
    }
    let describe = |name: &str| -> String {
        let key = match_key(name);
        let mut where_ = Vec::new();
        for lot in lots {
            match lot
                .columns
                .iter()
                .find(|c| match_key(&c.name) == key || match_key(&c.header) == key)
            {
                None => where_.push(format!("is not in \"{}\"", lot.provenance.file_name)),
                Some(c) if !c.is_numeric() => where_.push(format!(
                    "is text, not numeric, in \"{}\"",
                    lot.provenance.file_name
                )),
                _ => {}
            }
        }
        where_.join(" and ")
    };
    let is_named = |list: &[String], ia: usize| {
        let ca = &a.columns[ia];
        list.iter()
            .any(|n| match_key(n) == match_key(&ca.name) || match_key(n) == match_key(&ca.header))
    };
    // Exclusions first, then the selection (so verify can replay both from a record).
    for name in &selection.exclude {
        let key = match_key(name);
        let known = pairs.iter().any(|&(ia, _)| {
            match_key(&a.columns[ia].name) == key || match_key(&a.columns[ia].header) == key
        });
        if !known {
            return Err(PrepareError::UnknownCharacteristic {
                name: name.clone(),
                why: describe(name),
            });
        }
    }
    pairs.retain(|&(ia, _)| {
        let out = is_named(&selection.exclude, ia);
        if out {
            unmatched.push(Unmatched {
                lot: 0,
                column: a.columns[ia].header.clone(),
                why: "excluded".into(),
            });
        }
        !out
    });
    if let Some(only) = &selection.only {
        for name in only {
            let key = match_key(name);
            let ok = pairs.iter().any(|&(ia, _)| {
                match_key(&a.columns[ia].name) == key || match_key(&a.columns[ia].header) == key
            });
            if !ok {
                return Err(PrepareError::UnknownCharacteristic {
                    name: name.clone(),
                    why: describe(name),
                });
            }
        }
        // Keep the order the user gave.
        let mut ordered = Vec::new();
        for name in only {
            let key = match_key(name);
            if let Some(&pair) = pairs.iter().find(|&&(ia, _)| {
                match_key(&a.columns[ia].name) == key || match_key(&a.columns[ia].header) == key
            }) && !ordered.contains(&pair)
            {
                ordered.push(pair);
            }
        }
        for &(ia, _) in &pairs {
            if !ordered.iter().any(|&(x, _)| x == ia) {
                unmatched.push(Unmatched {
                    lot: 0,
                    column: a.columns[ia].header.clone(),
                    why: "not selected".into(),
                });
            }
        }
        pairs = ordered;
    }
    // A column with no values in a lot cannot be compared.
    pairs.retain(|&(ia, ib)| {
        for (lot, idx) in [(0usize, ia), (1usize, ib)] {
            let col = &lots[lot].columns[idx];
            if col.missing == lots[lot].len() {
                unmatched.push(Unmatched {
                    lot,
                    column: col.header.clone(),
                    why: "every cell is missing".into(),
                });
                return false;
            }
        }
        true
    });
    if pairs.is_empty() {
        return Err(PrepareError::NothingSelected);
    }
    let mut units = Vec::with_capacity(pairs.len());
    for &(ia, ib) in &pairs {
        let (ua, ub) = (&a.columns[ia].unit, &b.columns[ib].unit);
        if let (Some(x), Some(y)) = (ua, ub)
            && normalize_unit(x) != normalize_unit(y)
        {
            return Err(PrepareError::UnitMismatch {
                name: a.columns[ia].name.clone(),
                unit_a: x.clone(),
                unit_b: y.clone(),
                file_a: a.provenance.file_name.clone(),
                file_b: b.provenance.file_name.clone(),
            });
        }
        units.push(ua.clone().or_else(|| ub.clone()));
    }
    let characteristics: Vec<String> = pairs
        .iter()
        .map(|&(ia, _)| a.columns[ia].name.clone())
        .collect();
    let pairings = pairs
        .iter()
        .filter(|&&(ia, ib)| a.columns[ia].name != b.columns[ib].name)
        .map(|&(ia, ib)| Pairing {
            reference: a.columns[ia].header.clone(),
            candidate: b.columns[ib].header.clone(),
        })
        .collect();
    Ok(Plan {
        characteristics,
        units,
        unmatched,
        pairings,
        pairs,
    })
}

/// The values of the numeric columns at `idx`.
fn numeric_cols<'a>(lot: &'a Lot, idx: &[usize]) -> Vec<&'a [f64]> {
    idx.iter()
        .map(|&i| match &lot.columns[i].data {
            ColumnData::Numeric(v) => v.as_slice(),
            ColumnData::Text(_) => &[],
        })
        .collect()
}

fn build(lot: &Lot, idx: &[usize]) -> PreparedLot {
    let cols = numeric_cols(lot, idx);
    let kept = complete_rows(lot.len(), &cols);
    let mut data = Vec::with_capacity(kept.len() * cols.len());
    for c in &cols {
        if kept.len() == c.len() {
            data.extend_from_slice(c);
        } else {
            data.extend(kept.iter().map(|&r| c[r]));
        }
    }
    let out = left_out(lot, idx, &kept);
    finish_lot(lot, idx, kept, data, out)
}

fn build_releasing(lot: &mut Lot, idx: &[usize]) -> PreparedLot {
    let kept = complete_rows(lot.len(), &numeric_cols(lot, idx));
    let out = left_out(lot, idx, &kept);
    let m = kept.len();
    // Zeroed by the system on first touch, so the matrix costs memory only as it is filled.
    let mut data = vec![0.0; m * idx.len()];
    let every = m == lot.len();
    // The last column first: the columns were allocated in order, so each one released is at
    // the top of the allocator's heap, which can then hand the memory back to the system as
    // the matrix fills (memory holds about one copy of the numbers throughout, not two).
    for (slot, &i) in idx.iter().enumerate().rev() {
        if let ColumnData::Numeric(v) = &mut lot.columns[i].data {
            let dst = &mut data[slot * m..(slot + 1) * m];
            if every {
                dst.copy_from_slice(v);
            } else {
                for (d, &r) in dst.iter_mut().zip(&kept) {
                    *d = v[r];
                }
            }
            *v = Vec::new();
        }
    }
    finish_lot(lot, idx, kept, data, out)
}

/// Units with a value in every compared characteristic (listwise).
fn complete_rows(n: usize, cols: &[&[f64]]) -> Vec<usize> {
    (0..n)
        .filter(|&r| cols.iter().all(|c| !c[r].is_nan()))
        .collect()
}

/// The units not in `kept`, with their rows, labels and missing characteristics (read before
/// the numbers are released).
fn left_out(lot: &Lot, idx: &[usize], kept: &[usize]) -> Vec<LeftOut> {
    let n = lot.len();
    let mut left_out = Vec::new();
    let mut next = kept.iter().peekable();
    for i in 0..n {
        if next.peek() == Some(&&i) {
            next.next();
            continue;
        }
        let missing = idx
            .iter()
            .filter(|&&c| match &lot.columns[c].data {
                ColumnData::Numeric(v) => v.get(i).is_none_or(|x| x.is_nan()),
                ColumnData::Text(_) => false,
            })
            .map(|&c| lot.columns[c].name.clone())
            .collect();
        let labels = lot
            .columns
            .iter()
            .filter_map(|c| match &c.data {
                ColumnData::Text(t) => Some((c.header.clone(), t.get(i).to_string())),
                ColumnData::Numeric(_) => None,
            })
            .collect();
        left_out.push(LeftOut {
            row: lot.rows[i],
            labels,
            missing,
        });
    }
    left_out
}

fn finish_lot(
    lot: &Lot,
    idx: &[usize],
    kept: Vec<usize>,
    data: Vec<f64>,
    left_out: Vec<LeftOut>,
) -> PreparedLot {
    let n = lot.len();
    PreparedLot {
        left_out,
        name: lot.name.clone(),
        n_read: n,
        n_excluded: n - kept.len(),
        data: DMatrix::from_vec(kept.len(), idx.len(), data),
        kept,
        missing: idx.iter().map(|&i| lot.columns[i].missing).collect(),
    }
}

fn normalize_unit(u: &str) -> String {
    u.trim()
        .to_lowercase()
        .replace(['µ', 'μ'], "u")
        .replace(' ', "")
}
