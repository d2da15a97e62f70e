//! Work on all the units of a lot at once, arranged for the cache: cross-products by the
//! blocked matrix-multiply kernels that nalgebra ships (`matrixmultiply`, which picks the
//! widest vector instructions the processor has at run time), and triangular solves for every
//! unit a block of units at a time, so that a block stays in the processor's cache while each
//! of its columns is updated.
//!
//! Units are rows of column-major `n × p` matrices, as everywhere in the engine.

use nalgebra::{DMatrix, Dyn, MatrixView};

/// Rows per block of the triangular solves: 2,048 rows of 30 characteristics are 480 kB,
/// within the second-level cache of current processors.
pub const ROWS: usize = 2048;

/// A matrix view with any row and column strides (a transposed view is one).
pub type Strided<'a> = MatrixView<'a, f64, Dyn, Dyn, Dyn, Dyn>;

/// The view of `data` as a `rows × cols` matrix whose element `(i, j)` is
/// `data[i·row_stride + j·col_stride]` (panics when `data` is too short).
pub fn strided(
    data: &[f64],
    rows: usize,
    cols: usize,
    row_stride: usize,
    col_stride: usize,
) -> Strided<'_> {
    Strided::from_slice_with_strides_generic(
        data,
        Dyn(rows),
        Dyn(cols),
        Dyn(row_stride),
        Dyn(col_stride),
    )
}

/// `out += A B` for strided views. Products whose dimensions all exceed 5 go to the blocked
/// kernels through nalgebra's `gemm`; nalgebra hands smaller ones to a loop of its own that is
/// not meant for such views, so they are summed here directly (they are small).
pub fn add_product(out: &mut DMatrix<f64>, a: &Strided<'_>, b: &Strided<'_>) {
    const SMALL: usize = 5;
    let (r, m) = a.shape();
    let c = b.ncols();
    assert_eq!(b.nrows(), m, "add_product: inner dimensions differ");
    assert_eq!(out.shape(), (r, c), "add_product: output shape");
    if r > SMALL && m > SMALL && c > SMALL {
        out.gemm(1.0, a, b, 1.0);
        return;
    }
    for j in 0..c {
        for i in 0..r {
            let mut sum = 0.0;
            for k in 0..m {
                sum += a[(i, k)] * b[(k, j)];
            }
            out[(i, j)] += sum;
        }
    }
}

/// `XᵀX` of an `n × p` matrix (the sums of squares and cross-products of centred units),
/// through the blocked kernels on a transposed view of `x` (no copy of the units); exactly
/// symmetric.
pub fn cross_products(x: &DMatrix<f64>) -> DMatrix<f64> {
    let (n, p) = x.shape();
    let mut out = DMatrix::<f64>::zeros(p, p);
    if n == 0 || p == 0 {
        return out;
    }
    // The p × n transpose of the column-major data: element (k, i) is data[k·n + i].
    let xt = strided(x.as_slice(), p, n, n, 1);
    let xv = strided(x.as_slice(), n, p, 1, n);
    add_product(&mut out, &xt, &xv);
    // The kernels may sum the two halves in different orders: keep the lower triangle.
    for j in 0..p {
        for i in 0..j {
            out[(i, j)] = out[(j, i)];
        }
    }
    out
}

/// Solves `L zᵢ = yᵢ` in place for the rows `rows` of the column-major `n × p` data (`L`
/// lower triangular, `p × p`), a column at a time within the rows:
/// `z_a = (y_a − Σ_{b<a} L_ab z_b) / L_aa`.
fn forward_rows(data: &mut [f64], n: usize, l: &DMatrix<f64>, rows: std::ops::Range<usize>) {
    let p = l.nrows();
    for a in 0..p {
        let (done, rest) = data.split_at_mut(a * n);
        let za = &mut rest[rows.clone()];
        for b in 0..a {
            let lab = l[(a, b)];
            if lab != 0.0 {
                let zb = &done[b * n + rows.start..b * n + rows.end];
                for (x, y) in za.iter_mut().zip(zb) {
                    *x -= lab * y;
                }
            }
        }
        let laa = l[(a, a)];
        for x in za.iter_mut() {
            *x /= laa;
        }
    }
}

/// Solves `L zᵢ = yᵢ` in place for every unit (row) `yᵢ` of `y`, a block of [`ROWS`] units at
/// a time. Each value sees the same operations in the same order as a whole-column forward
/// substitution, so the result does not depend on the block size.
pub fn forward_substitute(y: &mut DMatrix<f64>, l: &DMatrix<f64>) {
    let n = y.nrows();
    debug_assert_eq!(y.ncols(), l.nrows());
    let data = y.as_mut_slice();
    let mut start = 0;
    while start < n {
        let end = (start + ROWS).min(n);
        forward_rows(data, n, l, start..end);
        start = end;
    }
}

/// `‖L⁻¹ (xᵢ ⊘ s)‖²` for every unit (row) `xᵢ` of `x`: the quadratic form `xᵢᵀ S⁻¹ xᵢ` of a
/// covariance `S = D R D` with `D = diag(s)` and `R = L Lᵀ`, by forward substitution on a
/// copy of each block of units (`x` is left as it is).
pub fn quadratic_forms(x: &DMatrix<f64>, scale: &[f64], l: &DMatrix<f64>) -> Vec<f64> {
    let (n, p) = x.shape();
    let mut out = vec![0.0; n];
    let mut block = vec![0.0; ROWS.min(n.max(1)) * p];
    let all = x.as_slice();
    let mut start = 0;
    while start < n {
        let m = ROWS.min(n - start);
        let buf = &mut block[..m * p];
        for k in 0..p {
            let src = &all[k * n + start..k * n + start + m];
            let s = scale[k];
            for (dst, &v) in buf[k * m..(k + 1) * m].iter_mut().zip(src) {
                *dst = v / s;
            }
        }
        forward_rows(buf, m, l, 0..m);
        let q = &mut out[start..start + m];
        for k in 0..p {
            for (acc, &z) in q.iter_mut().zip(&buf[k * m..(k + 1) * m]) {
                *acc += z * z;
            }
        }
        start += m;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn units(n: usize, p: usize) -> DMatrix<f64> {
        // A fixed, well-conditioned pattern (no randomness needed).
        DMatrix::from_fn(n, p, |i, k| {
            let t = (i * (k + 3) + 7 * k) as f64;
            (t * 0.618_034).sin() + 0.1 * (k as f64) * ((i as f64) * 0.37).cos()
        })
    }

    #[test]
    fn cross_products_match_the_definition() {
        // The definition Σᵢ x_ia x_ib, summed directly (a mathematical identity).
        for (n, p) in [(1, 1), (3, 2), (50, 7), (5000, 12)] {
            let x = units(n, p);
            let c = cross_products(&x);
            for a in 0..p {
                for b in 0..p {
                    let direct: f64 = (0..n).map(|i| x[(i, a)] * x[(i, b)]).sum();
                    assert!((c[(a, b)] - direct).abs() <= 1e-10 * direct.abs().max(1.0));
                    assert_eq!(c[(a, b)], c[(b, a)]);
                }
            }
        }
    }

    #[test]
    fn blocked_solves_equal_one_solve_per_unit() {
        // Across block boundaries (n > ROWS) each row equals nalgebra's own triangular solve.
        let (n, p) = (ROWS * 2 + 17, 6);
        let x = units(n, p);
        let cov = cross_products(&x) / n as f64;
        let l = nalgebra::Cholesky::new(cov).unwrap().l();
        let mut z = x.clone();
        forward_substitute(&mut z, &l);
        let scale = vec![1.0; p];
        let q = quadratic_forms(&x, &scale, &l);
        for i in [0, 1, ROWS - 1, ROWS, ROWS + 1, n - 1] {
            let row = x.row(i).transpose();
            let want = l.solve_lower_triangular(&row).unwrap();
            for k in 0..p {
                assert!((z[(i, k)] - want[k]).abs() <= 1e-12 * want[k].abs().max(1.0));
            }
            let w2 = want.norm_squared();
            assert!((q[i] - w2).abs() <= 1e-12 * w2.max(1.0));
        }
    }
}
