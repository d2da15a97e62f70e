//! Speed of the assumption checks against their straightforward forms, in the same run:
//! Mardia's skewness through the third-moment tensor (O(n·p³)) against the pair-sum
//! definition (O(n²·p), run on a subsample and extrapolated by (n/m)², stated in the table),
//! and the permutation test by group sums against refitting T² for every relabelling (run on
//! the first relabellings and extrapolated linearly; both give identical counts on them), and
//! on a shifted 2 x 200,000 x 30 pair the sequential decision (default stopping rules) against
//! 9,999 full relabellings (timed at 1,000 and 2,000 and extrapolated linearly to 9,999).
//!
//! Run: `cargo bench --bench checks_speed`.

use std::time::Instant;

use lotshift::stats::checks::{mardia, whiten_in_place};
use lotshift::stats::permutation::{
    Sequential, SplitMix64, StoppedBy, permutation_test_data, permutation_test_data_sequential,
    permutation_test_refit,
};
use nalgebra::DMatrix;

fn normal_matrix(n: usize, p: usize, seed: u64) -> DMatrix<f64> {
    let mut rng = SplitMix64(seed);
    let mut u = || ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    DMatrix::from_fn(n, p, |_, _| {
        let (a, b) = (u(), u());
        (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
    })
}

fn centred(x: &DMatrix<f64>) -> DMatrix<f64> {
    let mut c = x.clone();
    for mut col in c.column_iter_mut() {
        let m = col.mean();
        col.add_scalar_mut(-m);
    }
    c
}

/// b1 by the definition: (1/n²) Σᵢ Σⱼ (zᵢᵀ zⱼ)³ over whitened rows.
fn b1_pairs(z: &DMatrix<f64>) -> f64 {
    let (n, p) = z.shape();
    let rows: Vec<f64> = (0..n)
        .flat_map(|i| (0..p).map(move |k| (i, k)))
        .map(|(i, k)| z[(i, k)])
        .collect();
    let mut s = 0.0;
    for i in 0..n {
        let zi = &rows[i * p..(i + 1) * p];
        for j in 0..n {
            let zj = &rows[j * p..(j + 1) * p];
            let g: f64 = zi.iter().zip(zj).map(|(a, b)| a * b).sum();
            s += g * g * g;
        }
    }
    s / (n * n) as f64
}

fn main() {
    println!(
        "{:<58} {:>12} {:>14} {:>9} {:>8}",
        "check", "lotshift s", "baseline s", "ratio", "target"
    );
    // Mardia on 10^5 x 10.
    let (n, p, m) = (100_000, 10, 2_000);
    let x = normal_matrix(n, p, 1);
    let mut z = centred(&x);
    let t = Instant::now();
    assert!(whiten_in_place(&mut z));
    let fast = mardia("bench", &z);
    let fast_s = t.elapsed().as_secs_f64();
    let mut zs = centred(&x.rows(0, m).into_owned());
    assert!(whiten_in_place(&mut zs));
    let t = Instant::now();
    let b1_sub = b1_pairs(&zs);
    let pair_s = t.elapsed().as_secs_f64() * (n as f64 / m as f64).powi(2);
    let check = mardia("sub", &zs).skewness;
    assert!(
        (check - b1_sub).abs() < 1e-9 * b1_sub.max(1e-6),
        "tensor and pair sum agree on the subsample"
    );
    let ratio = pair_s / fast_s;
    println!(
        "{:<58} {:>12.3} {:>14.1} {:>9.0} {:>8}",
        format!("Mardia skewness, 1e5 x 10 (pair sum: {m} units, x(n/m)^2)"),
        fast_s,
        pair_s,
        ratio,
        if ratio >= 100.0 { ">=100 ok" } else { "MISSED" }
    );
    let _ = fast;
    // Permutation test, 2 x 5000 x 10, 9,999 relabellings.
    let a = normal_matrix(5_000, 10, 2);
    let b = normal_matrix(5_000, 10, 3).add_scalar(0.02);
    let t = Instant::now();
    let perm = permutation_test_data(&a, &b, 9_999, 11).expect("permutation");
    let fast_s = t.elapsed().as_secs_f64();
    let k = 100;
    let t = Instant::now();
    let slow = permutation_test_refit(&a, &b, k, 11).expect("refit");
    let slow_s = t.elapsed().as_secs_f64() * 9_999.0 / k as f64;
    let same = permutation_test_data(&a, &b, k, 11).expect("permutation");
    assert_eq!(
        same.at_least_observed, slow.at_least_observed,
        "identical counts for the same seed"
    );
    let ratio = slow_s / fast_s;
    println!(
        "{:<58} {:>12.3} {:>14.1} {:>9.0} {:>8}",
        format!(
            "permutation p ({}), 2 x 5000 x 10, 9999 (refit: {k}, scaled)",
            perm.p_value
        ),
        fast_s,
        slow_s,
        ratio,
        if ratio >= 20.0 { ">=20 ok" } else { "MISSED" }
    );
    // Sequential decision on a shifted pair of big lots against 9,999 full relabellings.
    let (n, p) = (200_000, 30);
    let a = normal_matrix(n, p, 4);
    let b = normal_matrix(n, p, 5).add_scalar(0.02);
    let rule = Sequential::default();
    let t = Instant::now();
    let seq =
        permutation_test_data_sequential(&a, &b, 9_999, 12, Some(&rule), 0.05).expect("sequential");
    let seq_s = t.elapsed().as_secs_f64();
    assert_eq!(seq.stopped_by, StoppedBy::LowerBoundary, "{seq:?}");
    let time_full = |k: usize| {
        let t = Instant::now();
        let r = permutation_test_data(&a, &b, k, 12).expect("full");
        (t.elapsed().as_secs_f64(), r)
    };
    let (t1, _) = time_full(1_000);
    let (t2, full) = time_full(2_000);
    let full_s = t2 + (t2 - t1) * (9_999.0 - 2_000.0) / 1_000.0;
    assert!(full.p_value < 0.05, "the full draws decide the same way");
    let ratio = full_s / seq_s;
    println!(
        "{:<58} {:>12.3} {:>14.1} {:>9.0} {:>8}",
        format!(
            "sequential permutation decision, 2 x 200000 x 30 ({} draws)",
            seq.drawn
        ),
        seq_s,
        full_s,
        ratio,
        if ratio >= 10.0 { ">=10 ok" } else { "MISSED" }
    );
}
