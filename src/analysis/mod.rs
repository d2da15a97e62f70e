//! Settings → [`Comparison`]: the one place the statistics are put together. Every number
//! the window, the command line and the record show comes from a `Comparison`.

use nalgebra::{DMatrix, DVector, Matrix2};
use serde::{Deserialize, Serialize};

use crate::stats::bignormal::{LargeLotNormality, large_lot_normality};
use crate::stats::checks::{self, BoxM, Mardia, Outlier, UnequalCovariance};
use crate::stats::hotelling::{self, CONDITION_WARN, Pooled};
use crate::stats::moments::{ColumnSummary, LotMoments, column_summary};
use crate::stats::normality::{MAX_UNITS, ShapiroWilk, shapiro_wilk};
use crate::stats::permutation::{PermutationResult, permutation_test};
use crate::stats::{EngineError, discriminant, ellipse, quote_list};

pub mod decision;
mod engine;
mod favour;
mod geometry;
mod types;
mod verdict;

pub use engine::*;
pub use favour::*;
pub use geometry::*;
pub use types::*;
pub use verdict::*;

pub use crate::format::{format_confidence, format_p, format_sig, p_text};
pub use crate::stats::permutation::{DEFAULT_HITS, DEFAULT_RISK, Sequential, StoppedBy};

use decision::{Decision, DecisionError, Observed, Specification};

#[cfg(test)]
mod tests {
    use super::*;

    fn lots() -> [DMatrix<f64>; 2] {
        let a = [
            [10.2, 20.1, 5.0],
            [9.8, 19.7, 5.3],
            [10.5, 20.6, 4.8],
            [10.1, 20.0, 5.1],
            [9.6, 19.9, 5.6],
            [10.3, 20.4, 4.9],
            [10.0, 20.2, 5.2],
        ];
        let b = [
            [10.6, 20.2, 5.1],
            [10.9, 20.8, 4.7],
            [10.4, 19.9, 5.5],
            [11.0, 20.5, 5.0],
            [10.7, 20.6, 5.2],
            [10.5, 20.3, 4.6],
        ];
        [
            DMatrix::from_fn(a.len(), 3, |i, k| a[i][k]),
            DMatrix::from_fn(b.len(), 3, |i, k| b[i][k]),
        ]
    }

    fn names() -> Vec<String> {
        ["x", "y", "z"].map(String::from).to_vec()
    }

    fn quick() -> Settings {
        Settings {
            permutations: 0,
            ..Settings::default()
        }
    }

    /// Borrowed and owned units give the same comparison to the last bit.
    #[test]
    fn borrowed_and_owned_units_agree_exactly() {
        let [a, b] = lots();
        let units = vec![None; 3];
        let borrowed = compare_units(
            &names(),
            &units,
            ["a", "b"],
            Units::Borrowed([&a, &b]),
            &quick(),
            &Silent,
        )
        .unwrap();
        let owned = compare_units(
            &names(),
            &units,
            ["a", "b"],
            Units::Owned([a.clone(), b.clone()]),
            &quick(),
            &Silent,
        )
        .unwrap();
        assert_eq!(
            serde_json::to_string(&borrowed).unwrap(),
            serde_json::to_string(&owned).unwrap()
        );
    }

    /// The lots' own means and covariances, given as summary statistics, give the same test
    /// as the units (the T² statistic depends on the data only through them).
    #[test]
    fn summaries_of_the_units_give_the_same_test() {
        let [a, b] = lots();
        let units = vec![None; 3];
        let c = compare_units(
            &names(),
            &units,
            ["a", "b"],
            Units::Borrowed([&a, &b]),
            &quick(),
            &Silent,
        )
        .unwrap();
        let summary = |g: usize| SummaryLot {
            name: c.lots[g].name.clone(),
            n: c.lots[g].n,
            mean: c.lots[g].mean.clone(),
            covariance: c.lots[g].covariance.clone(),
        };
        let s = compare_summaries(&names(), &units, [&summary(0), &summary(1)], &quick()).unwrap();
        let rel = |x: f64, y: f64| (x - y).abs() / x.abs().max(1e-300);
        assert!(rel(s.hotelling.t2, c.hotelling.t2) < 1e-10);
        assert!(rel(s.hotelling.p_value, c.hotelling.p_value) < 1e-9);
        for (i, j) in s.intervals.iter().zip(&c.intervals) {
            assert!(
                rel(
                    i.simultaneous[1] - i.simultaneous[0],
                    j.simultaneous[1] - j.simultaneous[0]
                ) < 1e-10
            );
        }
    }

    /// A bad alpha and a lot too small for the characteristics are errors, not results.
    #[test]
    fn invalid_inputs_are_errors() {
        let [a, b] = lots();
        let units = vec![None; 3];
        let bad = Settings {
            alpha: 1.5,
            ..quick()
        };
        assert!(matches!(
            compare_units(
                &names(),
                &units,
                ["a", "b"],
                Units::Borrowed([&a, &b]),
                &bad,
                &Silent
            ),
            Err(EngineError::BadAlpha(_))
        ));
        let tiny = [a.rows(0, 1).into_owned(), b.rows(0, 2).into_owned()];
        assert!(matches!(
            compare_units(
                &names(),
                &units,
                ["a", "b"],
                Units::Borrowed([&tiny[0], &tiny[1]]),
                &quick(),
                &Silent
            ),
            Err(EngineError::TooFewUnits { .. })
        ));
    }
}
