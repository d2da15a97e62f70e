//! Plot geometry of a comparison (pair ellipses), shared by the window and the HTML report.

#[allow(unused_imports)]
use super::*;

/// Geometry for the pairwise view of characteristics `i` and `j`.
#[derive(Debug, Clone, PartialEq)]
pub struct PairGeometry {
    /// Each lot's mean confidence ellipse for this pair alone.
    pub mean_regions: [Option<Vec<[f64; 2]>>; 2],
    /// Each lot's normal-theory data ellipse at the chosen coverage.
    pub data_ellipses: [Option<Vec<[f64; 2]>>; 2],
    /// Mean-difference ellipse as the shadow of the p-dimensional T² region.
    pub difference_shadow: Option<Vec<[f64; 2]>>,
    /// Mean-difference ellipse for this pair alone.
    pub difference_pair: Option<Vec<[f64; 2]>>,
    /// The two lot means.
    pub means: [[f64; 2]; 2],
    /// The mean difference (candidate − reference).
    pub difference: [f64; 2],
}

/// Ellipses for characteristics `i` and `j` from a finished comparison.
pub fn pair_geometry(c: &Comparison, i: usize, j: usize, coverage: f64) -> PairGeometry {
    let sub = |m: &Vec<Vec<f64>>| Matrix2::new(m[i][i], m[i][j], m[j][i], m[j][j]);
    let alpha = c.alpha();
    let segments = 120;
    let means = [
        [c.lots[0].mean[i], c.lots[0].mean[j]],
        [c.lots[1].mean[i], c.lots[1].mean[j]],
    ];
    let per_lot =
        |k: usize, r2: f64| ellipse::outline(means[k], sub(&c.lots[k].covariance), r2, segments);
    let n1 = c.lots[0].n;
    let n2 = c.lots[1].n;
    let scale = 1.0 / n1 as f64 + 1.0 / n2 as f64;
    let sp = sub(&c.pooled_covariance) * scale;
    let difference = [c.intervals[i].difference, c.intervals[j].difference];
    let p = c.characteristics.len();
    PairGeometry {
        mean_regions: [
            per_lot(0, ellipse::mean_region_r2(n1, alpha)),
            per_lot(1, ellipse::mean_region_r2(n2, alpha)),
        ],
        data_ellipses: [
            per_lot(0, ellipse::data_r2(coverage)),
            per_lot(1, ellipse::data_r2(coverage)),
        ],
        difference_shadow: ellipse::outline(
            difference,
            sp,
            ellipse::difference_r2(n1, n2, p, alpha),
            segments,
        ),
        difference_pair: ellipse::outline(
            difference,
            sp,
            ellipse::difference_r2(n1, n2, 2, alpha),
            segments,
        ),
        means,
        difference,
    }
}
