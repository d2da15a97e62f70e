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
}

pub use crate::data::counterpart;

impl Lots {
    /// Both lots, when both are loaded.
    pub fn both(&self) -> Option<[Arc<Lot>; 2]> {
        match &self.slots {
            [Some(a), Some(b)] => Some([a.clone(), b.clone()]),
            _ => None,
        }
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
        let [Some(a), Some(b)] = &self.slots else {
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
        self.slots = [Some(Arc::new(a)), Some(Arc::new(b))];
        Ok(())
    }

    /// Swaps reference and candidate (and the lot values of a file holding both).
    pub fn swap(&mut self) {
        if let Some(c) = &mut self.combined {
            c.values.swap(0, 1);
        }
        self.slots.swap(0, 1);
    }
}
