//! The lots the window compares: the two slots, the file holding both lots (split by a lot
//! column with [`data::split_lot`]), the characteristics unticked, and from those the
//! selection and the characteristics list the side panel and the specification editor show.

use std::collections::BTreeSet;
use std::sync::Arc;

use crate::data::{self, Lot, Selection, match_key};

use super::spec_editor::Characteristic;
use super::worker::{Slot, Source};

/// The bundled sample lots (invented; see sample-lots/README.md): reference, candidate.
pub const SAMPLES: [(&str, &[u8]); 2] = [
    (
        "sample-lots/reference-route-a.csv",
        include_bytes!("../../sample-lots/reference-route-a.csv"),
    ),
    (
        "sample-lots/candidate-route-b.csv",
        include_bytes!("../../sample-lots/candidate-route-b.csv"),
    ),
];

/// The sample lots to load, reference first.
pub fn samples() -> Vec<Source> {
    SAMPLES
        .iter()
        .map(|&(name, bytes)| Source::Embedded(name, bytes))
        .collect()
}

/// One file holding both lots, split by a lot column.
pub struct Combined {
    /// The file's table as read.
    pub table: Arc<Lot>,
    /// Columns that can hold lots, with their distinct values
    /// ([`data::lot_column_candidates`]).
    pub candidates: Vec<(String, Vec<String>)>,
    /// The lot column chosen.
    pub column: String,
    /// The reference and candidate lot values chosen.
    pub values: [String; 2],
}

impl Combined {
    /// The distinct values of the chosen lot column.
    pub fn values_of_column(&self) -> &[String] {
        self.candidates
            .iter()
            .find(|(n, _)| n == &self.column)
            .map_or(&[], |(_, v)| v.as_slice())
    }
}

/// The reference and candidate lots and what is compared of them.
#[derive(Default)]
pub struct Lots {
    /// Reference and candidate lots as loaded.
    pub slots: [Option<Arc<Lot>>; 2],
    /// The file both lots come from, when they come from one.
    pub combined: Option<Combined>,
    /// Match keys of characteristics the user unticked.
    pub excluded: BTreeSet<String>,
    /// Two files were loaded together and their roles have not been confirmed yet.
    pub roles_to_confirm: bool,
    /// Columns written differently in the two lots that the user paired for this session.
    pub pairs: Vec<ColumnPair>,
    /// The candidate lot as read and its copy with the paired columns renamed.
    paired: Option<(Arc<Lot>, Arc<Lot>)>,
    /// Units set aside with a reason for this session (the files stay as they are; the
    /// record lists them). Cleared when either lot is loaded anew.
    pub set_aside: Vec<crate::data::exclusions::Exclusion>,
}

/// A column of the candidate lot the user paired with a reference column of another name:
/// the run compares them as one characteristic (the candidate column's header stays as
/// read, so messages and the record still name the file's header).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ColumnPair {
    /// The reference lot's column name.
    pub reference: String,
    /// The candidate lot's column name, as read.
    pub candidate: String,
}

/// A numeric column found in one lot only, and the nearest name among the other lot's
/// columns that are in one lot only.
#[derive(Debug, Clone, PartialEq)]
pub struct OneLotColumn {
    /// 0: the reference lot, 1: the candidate lot.
    pub lot: usize,
    /// Header as read.
    pub header: String,
    /// Name without the unit.
    pub name: String,
    /// The nearest column name in the other lot, if one is near enough.
    pub nearest: Option<String>,
}

pub use crate::data::counterpart;

impl Lots {
    /// Both lots, when both are loaded.
    pub fn both(&self) -> Option<[Arc<Lot>; 2]> {
        match (&self.slots[0], self.candidate()) {
            (Some(a), Some(b)) => Some([a.clone(), b.clone()]),
            _ => None,
        }
    }

    /// The candidate lot as the run sees it: with the paired columns renamed to their
    /// reference names (the lot as read when nothing is paired).
    pub fn candidate(&self) -> Option<&Arc<Lot>> {
        let b = self.slots[1].as_ref()?;
        match &self.paired {
            Some((source, renamed)) if Arc::ptr_eq(source, b) => Some(renamed),
            _ => Some(b),
        }
    }

    /// Pairs a candidate column with a reference column of another name, for this session.
    pub fn pair(&mut self, pair: ColumnPair) {
        if !self.pairs.contains(&pair) {
            self.pairs.push(pair);
        }
        self.rebuild_paired();
    }

    /// Forgets a pairing.
    pub fn unpair(&mut self, pair: &ColumnPair) {
        self.pairs.retain(|p| p != pair);
        self.rebuild_paired();
    }

    fn rebuild_paired(&mut self) {
        self.paired = None;
        let Some(b) = &self.slots[1] else {
            return;
        };
        if self.pairs.is_empty() {
            return;
        }
        let mut renamed = Lot::clone(b);
        for c in renamed.columns.iter_mut().filter(|c| c.is_numeric()) {
            let key = match_key(&c.name);
            if let Some(p) = self.pairs.iter().find(|p| match_key(&p.candidate) == key) {
                c.name.clone_from(&p.reference);
            }
        }
        self.paired = Some((b.clone(), Arc::new(renamed)));
    }

    fn clear_pairs(&mut self) {
        self.pairs.clear();
        self.paired = None;
    }

    /// The numeric columns (with some values) found in one lot only, reference lot first,
    /// each with the nearest name among the other lot's one-lot columns.
    pub fn one_lot_columns(&self) -> Vec<OneLotColumn> {
        let (Some(a), Some(b)) = (&self.slots[0], self.candidate()) else {
            return Vec::new();
        };
        let only = |this: &Lot, other: &Lot| -> Vec<(String, String)> {
            this.columns
                .iter()
                .filter(|c| c.is_numeric() && counterpart(other, c).is_none())
                .map(|c| (c.header.clone(), c.name.clone()))
                .collect()
        };
        let sides = [only(a, b), only(b, a)];
        let mut out = Vec::new();
        for (lot, cols) in sides.iter().enumerate() {
            let others: Vec<String> = sides[1 - lot].iter().map(|(_, n)| n.clone()).collect();
            for (header, name) in cols {
                out.push(OneLotColumn {
                    lot,
                    header: header.clone(),
                    name: name.clone(),
                    nearest: data::spec::nearest(name, &others).map(str::to_owned),
                });
            }
        }
        out
    }

    /// Both slots are filled.
    pub fn loaded(&self) -> bool {
        self.slots.iter().all(Option::is_some)
    }

    /// The slot one more file goes to: the reference while it is empty, else the candidate.
    pub fn next_slot(&self) -> Slot {
        if self.slots[0].is_none() {
            Slot::Reference
        } else {
            Slot::Candidate
        }
    }

    /// The characteristics both lots have (numeric in both, with some values), in the
    /// reference lot's order, with their units; without the unticked ones when `ticked`.
    pub fn characteristic_list(&self, ticked: bool) -> Vec<Characteristic> {
        let (Some(a), Some(b)) = (&self.slots[0], self.candidate()) else {
            return Vec::new();
        };
        a.columns
            .iter()
            .filter(|c| c.is_numeric() && c.missing < a.len())
            .filter_map(|c| {
                let cb = counterpart(b, c)?;
                if cb.missing == b.len() || ticked && self.excluded.contains(&match_key(&c.name)) {
                    return None;
                }
                Some((c.name.clone(), c.unit.clone().or_else(|| cb.unit.clone())))
            })
            .collect()
    }

    /// The selection of the next run: every characteristic but the unticked ones.
    pub fn selection(&self) -> Selection {
        let Some(a) = &self.slots[0] else {
            return Selection::default();
        };
        let exclude = a
            .columns
            .iter()
            .filter(|c| c.is_numeric() && self.excluded.contains(&match_key(&c.name)))
            .map(|c| c.name.clone())
            .collect();
        Selection {
            only: None,
            exclude,
        }
    }

    /// Ticks or unticks a characteristic.
    pub fn set_compared(&mut self, key: String, compared: bool) {
        if compared {
            self.excluded.remove(&key);
        } else {
            self.excluded.insert(key);
        }
    }

    /// Puts lots that were read into the reference slot, the candidate slot or both (a file
    /// holding both lots goes through [`Self::set_combined`] instead).
    pub fn place(&mut self, slot: Slot, mut lots: Vec<Lot>) {
        self.combined = None;
        self.clear_pairs();
        self.set_aside.clear();
        // Two files read together get their roles from the order they came in: the user
        // confirms them. One file put in a slot the user chose settles both roles.
        self.roles_to_confirm = slot == Slot::Both && lots.len() == 2;
        match slot {
            Slot::Reference | Slot::Candidate => {
                self.slots[usize::from(slot == Slot::Candidate)] = lots.pop().map(Arc::new);
            }
            Slot::Both | Slot::Combined => {
                let b = lots.pop().map(Arc::new);
                let a = lots.pop().map(Arc::new);
                self.slots = [a, b];
            }
        }
    }

    /// Takes a file holding both lots: the first lot column ([`data::lot_column_candidates`])
    /// and its first two values are chosen, and the lots split out of it.
    ///
    /// # Errors
    /// No column to split by (the file is left unloaded), or the split's message.
    pub fn set_combined(&mut self, table: Lot) -> Result<(), String> {
        let candidates = data::lot_column_candidates(&table);
        let Some((column, values)) = candidates.first().cloned() else {
            return Err(format!(
                "{}: no text column with between 2 and 50 distinct values to split the lots by; \
                 the file is left unloaded",
                table.provenance.path
            ));
        };
        self.combined = Some(Combined {
            table: Arc::new(table),
            candidates,
            column,
            values: [values[0].clone(), values[1].clone()],
        });
        self.roles_to_confirm = false;
        self.resplit()
    }

    /// Chooses the lot column and values; returns whether the lots are to be split anew
    /// (the choice changed and names two different values).
    pub fn choose_split(&mut self, column: String, values: [String; 2]) -> bool {
        let Some(c) = &mut self.combined else {
            return false;
        };
        let changed = c.column != column || c.values != values;
        c.column = column;
        c.values = values;
        changed && c.values[0] != c.values[1]
    }

    /// Splits the file holding both lots by the chosen column and values into the slots.
    ///
    /// # Errors
    /// The split's message ([`data::split_lot`]); the slots stay as they were.
    pub fn resplit(&mut self) -> Result<(), String> {
        let Some(c) = &self.combined else {
            return Ok(());
        };
        let [a, b] = data::split_lot(&c.table, &c.column, Some([&c.values[0], &c.values[1]]))
            .map_err(|e| e.to_string())?;
        self.clear_pairs();
        self.set_aside.clear();
        self.slots = [Some(Arc::new(a)), Some(Arc::new(b))];
        Ok(())
    }

    /// Swaps reference and candidate (and the lot values of a file holding both).
    pub fn swap(&mut self) {
        if let Some(c) = &mut self.combined {
            c.values.swap(0, 1);
        }
        self.slots.swap(0, 1);
        // A pairing renames a candidate column to the reference's name: after the swap the
        // other lot's column is the one renamed.
        for p in &mut self.pairs {
            std::mem::swap(&mut p.reference, &mut p.candidate);
        }
        for e in &mut self.set_aside {
            e.lot = 1 - e.lot;
        }
        self.rebuild_paired();
    }

    /// Sets a unit aside with a reason (again: the new reason replaces the old).
    pub fn set_unit_aside(&mut self, e: crate::data::exclusions::Exclusion) {
        self.set_aside
            .retain(|x| !(x.lot == e.lot && x.row == e.row));
        self.set_aside.push(e);
    }

    /// Puts a unit set aside back.
    pub fn restore_unit(&mut self, lot: usize, row: u32) {
        self.set_aside.retain(|x| !(x.lot == lot && x.row == row));
    }
}
