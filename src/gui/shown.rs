//! A finished result and the plot geometry derived from it, computed once per result (and
//! once per pair of characteristics), never per frame.

use std::collections::HashMap;
use std::sync::Arc;

use egui_plot::PlotPoint;

use crate::analysis::{Comparison, PairGeometry, pair_geometry};
use crate::data::{self, ColumnData, Lot, Prepared, PreparedLot};
use crate::report::Record;
use crate::source::QuerySource;
use crate::source::aggregate::CountedLot;
use nalgebra::DMatrix;

/// Most units drawn per lot in a scatter plot (a stable subsample beyond that).
pub const MAX_POINTS: usize = 4000;
/// Units drawn per lot in each small-multiples cell.
pub const SMALL_POINTS: usize = 300;

/// One pair's plot data.
pub struct PairView {
    /// Ellipses and means.
    pub geometry: PairGeometry,
    /// Sampled units of each lot, as plot points.
    pub points: [Vec<PlotPoint>; 2],
}

/// Everything the views show for one result.
pub struct Shown {
    /// The comparison.
    pub comparison: Comparison,
    /// The unit data it was computed from.
    pub prepared: Arc<Prepared>,
    /// The lots as read (for labels and rows).
    pub lots: [Arc<Lot>; 2],
    /// The record for export.
    pub record: Record,
    /// Indices (into the prepared lot) of the units drawn, per lot.
    pub sample: [Vec<usize>; 2],
    /// Relabellings asked for (the permutation p-value may still be on its way).
    pub requested_permutations: usize,
    /// Hover text ("lot: row 17, serial ...") of each drawn unit, per lot.
    pub unit_text: Arc<[Vec<String>; 2]>,
    /// The reason typed for setting units aside (the Verdict view's own text).
    pub set_aside_reason: String,
    /// Computed inside a database: the lots as counted there (no unit left the database,
    /// so `prepared` holds no units and the views that draw units say so).
    pub counted: Option<[CountedLot; 2]>,
    pairs: HashMap<(usize, usize, u64), Arc<PairView>>,
}

/// A stable subsample of `n` indices: the same units every time, spread over the file.
pub fn stable_sample(n: usize, max: usize) -> Vec<usize> {
    if n <= max {
        return (0..n).collect();
    }
    let mut keyed: Vec<(u64, usize)> = (0..n)
        .map(|i| {
            (
                (i as u64)
                    .wrapping_add(1)
                    .wrapping_mul(0x9E37_79B9_7F4A_7C15)
                    .rotate_left(17),
                i,
            )
        })
        .collect();
    keyed.select_nth_unstable(max);
    let mut out: Vec<usize> = keyed[..max].iter().map(|&(_, i)| i).collect();
    out.sort_unstable();
    out
}

impl Shown {
    /// Builds the plot caches of a result.
    pub fn new(
        comparison: Comparison,
        prepared: Arc<Prepared>,
        lots: [Arc<Lot>; 2],
        record: Record,
    ) -> Self {
        let sample = [
            stable_sample(prepared.lots[0].kept.len(), MAX_POINTS),
            stable_sample(prepared.lots[1].kept.len(), MAX_POINTS),
        ];
        let mut shown = Shown {
            comparison,
            prepared,
            lots,
            record,
            sample,
            unit_text: Arc::new([Vec::new(), Vec::new()]),
            requested_permutations: 0,
            set_aside_reason: String::new(),
            counted: None,
            pairs: HashMap::new(),
        };
        let text = [0, 1].map(|g| {
            (0..shown.sample[g].len())
                .map(|k| shown.describe_unit(g, k))
                .collect()
        });
        shown.unit_text = Arc::new(text);
        shown
    }

    /// A result computed inside the database from `source`: the comparison, its record and
    /// the lots as counted there. The lots and the prepared units are empty stand-ins that
    /// carry the names, rows read and missing cells.
    pub fn from_database(
        comparison: Comparison,
        record: Record,
        counted: [CountedLot; 2],
        source: &QuerySource,
    ) -> Self {
        let p = comparison.characteristics.len();
        let url = source.database.url().to_string();
        let lot = |g: usize| {
            let c = &counted[g];
            Lot {
                name: c.value.clone(),
                provenance: data::Provenance {
                    file_name: url.clone(),
                    split: Some((source.lot_column.clone(), c.value.clone())),
                    rows_read: c.rows_read,
                    query: Some(source.query.clone()),
                    ..data::Provenance::of_rows(&url, source.database.kind())
                },
                columns: Vec::new(),
                rows: Vec::new(),
            }
        };
        let prepared_lot = |g: usize| {
            let c = &counted[g];
            PreparedLot {
                name: c.value.clone(),
                data: DMatrix::zeros(0, p),
                kept: Vec::new(),
                n_read: c.rows_read,
                n_excluded: c.rows_read.saturating_sub(c.n),
                missing: c.missing.clone(),
                left_out: Vec::new(),
            }
        };
        let prepared = Prepared {
            characteristics: comparison.characteristics.clone(),
            units: comparison.units.clone(),
            lots: [prepared_lot(0), prepared_lot(1)],
            unmatched: Vec::new(),
            pairings: Vec::new(),
            exclusions: Vec::new(),
        };
        let lots = [Arc::new(lot(0)), Arc::new(lot(1))];
        let mut shown = Shown::new(comparison, Arc::new(prepared), lots, record);
        shown.counted = Some(counted);
        shown
    }

    /// The result was computed inside a database: there are no units to draw.
    pub fn in_database(&self) -> bool {
        self.counted.is_some()
    }

    /// Plot data for characteristics `i` (x) and `j` (y), computed on first use.
    pub fn pair(&mut self, i: usize, j: usize, coverage: f64) -> Arc<PairView> {
        let key = (i, j, coverage.to_bits());
        if let Some(v) = self.pairs.get(&key) {
            return v.clone();
        }
        let geometry = pair_geometry(&self.comparison, i, j, coverage);
        let points = [0, 1].map(|g| {
            let lot = &self.prepared.lots[g];
            // Every unit, or only the drawn ones in the order drawn (the window's runs keep
            // just those: see `worker::run_comparison_staged`).
            let every = lot.data.nrows() == lot.kept.len();
            self.sample[g]
                .iter()
                .enumerate()
                .map(|(pos, &r)| {
                    let row = if every { r } else { pos };
                    PlotPoint::new(lot.data[(row, i)], lot.data[(row, j)])
                })
                .collect()
        });
        let view = Arc::new(PairView { geometry, points });
        self.pairs.insert(key, view.clone());
        view
    }

    /// "row 17, HX40-A-0016" for the `index`-th drawn unit of lot `g`.
    pub fn describe_unit(&self, g: usize, index: usize) -> String {
        let Some(&r) = self.sample[g].get(index) else {
            return String::new();
        };
        self.describe_prepared_unit(g, r)
    }

    /// Row and first label of unit `r` of prepared lot `g`.
    pub fn describe_prepared_unit(&self, g: usize, r: usize) -> String {
        let lot = &self.lots[g];
        let Some(&k) = self.prepared.lots[g].kept.get(r) else {
            return String::new();
        };
        let row = lot.rows.get(k).copied().unwrap_or(0);
        let label = lot
            .columns
            .iter()
            .find_map(|c| match &c.data {
                ColumnData::Text(t) if !t.is_empty() => {
                    Some(format!(", {} {}", c.header, t.get(k)))
                }
                _ => None,
            })
            .unwrap_or_default();
        format!("{}: row {row}{label}", lot.name)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn subsample_is_stable_sorted_and_capped() {
        let a = stable_sample(100_000, 4000);
        let b = stable_sample(100_000, 4000);
        assert_eq!(a, b);
        assert_eq!(a.len(), 4000);
        assert!(a.windows(2).all(|w| w[0] < w[1]));
        // Spread over the whole lot, not just its start.
        assert!(*a.last().unwrap() > 90_000 && a[0] < 10_000);
        assert_eq!(stable_sample(10, 4000), (0..10).collect::<Vec<_>>());
    }
}
