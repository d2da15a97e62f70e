//! Mathematical properties of the two-sample T² that any correct implementation has,
//! a type-I error simulation, and the planted truth of the sample lots.

use crate::common;
use common::{names, sample};

use lotshift::analysis::{self, Comparison, LotData, Settings, Silent};
use lotshift::data::{self, LoadOptions, Selection};
use lotshift::stats::EngineError;
use nalgebra::{DMatrix, DVector};

/// SplitMix64 with Box–Muller normals: a small, seeded generator for test data.
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
    fn lot(&mut self, n: usize, p: usize, shift: f64) -> DMatrix<f64> {
        // Correlated characteristics: x = z L with a fixed lower-triangular L.
        let z = DMatrix::from_fn(n, p, |_, _| self.normal());
        let l = DMatrix::from_fn(p, p, |i, j| {
            if i >= j {
                1.0 / (1.0 + (i - j) as f64)
            } else {
                0.0
            }
        });
        let mut x = z * l.transpose();
        for k in 0..p {
            for i in 0..n {
                x[(i, k)] += shift * (k as f64 + 1.0);
            }
        }
        x
    }
}

fn run(x: &DMatrix<f64>, y: &DMatrix<f64>, alpha: f64) -> Result<Comparison, EngineError> {
    let p = x.ncols();
    analysis::compare(
        &names(p),
        &vec![None; p],
        [
            LotData { name: "1", data: x },
            LotData { name: "2", data: y },
        ],
        &Settings {
            alpha,
            leave_one_out: true,
            permutations: 0,
            ..Settings::default()
        },
        &Silent,
    )
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

#[test]
fn t2_is_invariant_under_affine_maps() {
    // Property: T² = n1 n2/N dᵀ Sp⁻¹ d is unchanged by x ↦ A x + b for any non-singular A.
    let mut rng = Rng(11);
    let x = rng.lot(23, 4, 0.0);
    let y = rng.lot(31, 4, 0.4);
    let a = DMatrix::from_fn(4, 4, |i, j| if i == j { 3.0 } else { rng.normal() });
    let b = DVector::from_fn(4, |k, _| 1000.0 * (k as f64 + 1.0));
    let map = |m: &DMatrix<f64>| {
        let mut out = m * a.transpose();
        for mut row in out.row_iter_mut() {
            row += b.transpose();
        }
        out
    };
    let c0 = run(&x, &y, 0.05).unwrap();
    let c1 = run(&map(&x), &map(&y), 0.05).unwrap();
    assert!(rel(c1.hotelling.t2, c0.hotelling.t2) < 1e-8);
    assert!(rel(c1.hotelling.p_value, c0.hotelling.p_value) < 1e-8);
    assert_eq!(
        c1.discriminant.leave_one_out_misclassified,
        c0.discriminant.leave_one_out_misclassified
    );
    assert_eq!(
        c1.discriminant.apparent_misclassified,
        c0.discriminant.apparent_misclassified
    );
}

#[test]
fn swapping_lots_changes_only_signs() {
    // Property: T² is symmetric in the lots; the difference and the direction change sign.
    let mut rng = Rng(12);
    let x = rng.lot(18, 3, 0.0);
    let y = rng.lot(26, 3, 0.5);
    let c = run(&x, &y, 0.05).unwrap();
    let s = run(&y, &x, 0.05).unwrap();
    assert!(rel(s.hotelling.t2, c.hotelling.t2) < 1e-12);
    for k in 0..3 {
        assert!(rel(-s.intervals[k].difference, c.intervals[k].difference) < 1e-12);
        assert!(
            rel(
                -s.intervals[k].simultaneous[1],
                c.intervals[k].simultaneous[0]
            ) < 1e-12
        );
        assert!(
            rel(
                -s.discriminant.coefficients[k],
                c.discriminant.coefficients[k]
            ) < 1e-10
        );
    }
    let lc = c.discriminant.leave_one_out_misclassified.unwrap();
    let ls = s.discriminant.leave_one_out_misclassified.unwrap();
    assert_eq!(lc, [ls[1], ls[0]]);
}

#[test]
fn one_characteristic_gives_the_squared_pooled_t() {
    // Property: with p = 1, T² is the square of the pooled two-sample t statistic, and its
    // p-value is the two-sided t p-value.
    let mut rng = Rng(13);
    let x = rng.lot(9, 1, 0.0);
    let y = rng.lot(14, 1, 0.8);
    let c = run(&x, &y, 0.05).unwrap();
    let t = c.per_characteristic[0].pooled_t;
    assert!(rel(c.hotelling.t2, t * t) < 1e-12);
    assert!(rel(c.hotelling.p_value, c.per_characteristic[0].pooled_p) < 1e-12);
    // With one characteristic the simultaneous, Bonferroni and one-at-a-time intervals agree.
    let iv = &c.intervals[0];
    assert!(rel(iv.simultaneous[0], iv.one_at_a_time[0]) < 1e-10);
    assert!(rel(iv.bonferroni[1], iv.one_at_a_time[1]) < 1e-10);
}

#[test]
fn identical_lots_give_zero() {
    let mut rng = Rng(14);
    let x = rng.lot(15, 3, 0.0);
    let c = run(&x, &x, 0.05).unwrap();
    assert!(c.hotelling.t2.abs() < 1e-20);
    assert!((c.hotelling.p_value - 1.0).abs() < 1e-12);
    assert!(!c.hotelling.differ);
}

#[test]
fn the_discriminant_direction_maximizes_the_squared_t() {
    // Property (the union–intersection principle behind T², J&W §6.3): the largest squared
    // two-sample t over all linear combinations aᵀx is T², reached at a = Sp⁻¹ d.
    let mut rng = Rng(15);
    let x = rng.lot(20, 3, 0.0);
    let y = rng.lot(17, 3, 0.3);
    let c = run(&x, &y, 0.05).unwrap();
    let a = DVector::from_vec(c.discriminant.coefficients.clone());
    let project = |m: &DMatrix<f64>| DMatrix::from_column_slice(m.nrows(), 1, (m * &a).as_slice());
    let one = run(&project(&x), &project(&y), 0.05).unwrap();
    assert!(rel(one.hotelling.t2, c.hotelling.t2) < 1e-10);
    // Any other direction gives less.
    for _ in 0..20 {
        let b = DVector::from_fn(3, |_, _| rng.normal());
        let pb = |m: &DMatrix<f64>| DMatrix::from_column_slice(m.nrows(), 1, (m * &b).as_slice());
        let other = run(&pb(&x), &pb(&y), 0.05).unwrap();
        assert!(other.hotelling.t2 <= c.hotelling.t2 * (1.0 + 1e-12));
    }
}

#[test]
fn lots_far_from_zero_lose_no_digits() {
    // Property (shift invariance): lots near 1e6 with spreads near 1e-2 agree with the same
    // data near zero. Multiples of 2^-14 are exact at both magnitudes, so any disagreement is the
    // computation's own.
    let mut rng = Rng(16);
    let q = |v: f64| (v * 16384.0).round() / 16384.0;
    let x0 = rng.lot(25, 3, 0.0).map(|v| q(0.01 * v));
    let y0 = rng.lot(30, 3, 0.0).map(|v| q(0.01 * v + 0.004));
    let far = |m: &DMatrix<f64>| m.map(|v| v + 1.0e6);
    let near = run(&x0, &y0, 0.05).unwrap();
    let away = run(&far(&x0), &far(&y0), 0.05).unwrap();
    assert!(
        rel(away.hotelling.t2, near.hotelling.t2) < 1e-9,
        "{} vs {}",
        away.hotelling.t2,
        near.hotelling.t2
    );
    for k in 0..3 {
        assert!(rel(away.intervals[k].difference, near.intervals[k].difference) < 1e-9);
    }
}

#[test]
fn false_alarm_rate_under_equal_means_is_alpha() {
    // Simulation: 3000 seeded pairs of lots with equal means (p = 3, n = 12 and 20). The
    // rejection rate must lie inside the 99% binomial band around alpha = 0.05:
    // 0.05 ± 2.576·sqrt(0.05·0.95/3000) = 0.05 ± 0.0103.
    let mut rng = Rng(17);
    let trials = 3000;
    let mut rejected = 0;
    for _ in 0..trials {
        let x = rng.lot(12, 3, 0.0);
        let y = rng.lot(20, 3, 0.0);
        let c = analysis::compare(
            &names(3),
            &[None, None, None],
            [
                LotData {
                    name: "1",
                    data: &x,
                },
                LotData {
                    name: "2",
                    data: &y,
                },
            ],
            &Settings {
                alpha: 0.05,
                leave_one_out: false,
                checks: false,
                permutations: 0,
                ..Settings::default()
            },
            &Silent,
        )
        .unwrap();
        rejected += usize::from(c.hotelling.differ);
    }
    let rate = rejected as f64 / trials as f64;
    assert!((rate - 0.05).abs() < 0.0103, "rejection rate {rate}");
}

#[test]
fn degenerate_inputs_name_the_culprits() {
    let mut rng = Rng(18);
    // Too few units: n1 + n2 - 2 < p.
    let x = rng.lot(2, 4, 0.0);
    let y = rng.lot(3, 4, 0.0);
    assert_eq!(
        run(&x, &y, 0.05).unwrap_err(),
        EngineError::TooFewUnits { n1: 2, n2: 3, p: 4 }
    );
    // A constant characteristic.
    let mut x = rng.lot(10, 3, 0.0);
    let mut y = rng.lot(10, 3, 0.0);
    x.column_mut(1).fill(5.0);
    y.column_mut(1).fill(5.0);
    assert_eq!(
        run(&x, &y, 0.05).unwrap_err(),
        EngineError::Constant {
            names: vec!["c1".into()]
        }
    );
    // Collinear: c2 = 2 c0 - c1 exactly.
    let mut x = rng.lot(10, 3, 0.0);
    let mut y = rng.lot(12, 3, 0.0);
    for m in [&mut x, &mut y] {
        for i in 0..m.nrows() {
            m[(i, 2)] = 2.0 * m[(i, 0)] - m[(i, 1)];
        }
    }
    match run(&x, &y, 0.05).unwrap_err() {
        EngineError::Collinear { mut names, .. } => {
            names.sort();
            assert_eq!(names, vec!["c0", "c1", "c2"]);
        }
        e => panic!("{e}"),
    }
    // Nearly collinear: a warning that names them, and a result.
    let mut x = rng.lot(40, 3, 0.0);
    let mut y = rng.lot(40, 3, 0.0);
    for m in [&mut x, &mut y] {
        for i in 0..m.nrows() {
            m[(i, 2)] = m[(i, 0)] + 1e-4 * rng.normal();
        }
    }
    let c = run(&x, &y, 0.05).unwrap();
    assert_eq!(c.warnings.len(), 1);
    assert!(
        c.warnings[0].contains("\"c0\"") && c.warnings[0].contains("\"c2\""),
        "{}",
        c.warnings[0]
    );
    assert!(!c.warnings[0].contains("\"c1\""), "{}", c.warnings[0]);
}

/// The reference sample lot against another sample lot file.
fn compare_samples(other: &str) -> Comparison {
    let files = [sample("reference-route-a.csv"), sample(other)];
    let [a, b] = data::load_two(&files, None, None, &LoadOptions::default()).unwrap();
    let p = data::prepare(&a, &b, &Selection::default()).unwrap();
    analysis::compare(
        &p.characteristics,
        &p.units,
        [
            LotData {
                name: "a",
                data: &p.lots[0].data,
            },
            LotData {
                name: "b",
                data: &p.lots[1].data,
            },
        ],
        &Settings::default(),
        &Silent,
    )
    .unwrap()
}

#[test]
fn sample_lots_show_the_planted_shift() {
    // The generator (sample-lots/generate.py) planted a shift of +0.35 SD in hub length and
    // -0.35 SD in flange thickness (correlated 0.85) and nothing else.
    let c = compare_samples("candidate-route-b.csv");
    assert!(
        c.hotelling.differ,
        "the multivariate test finds the shift (p = {})",
        c.hotelling.p_value
    );
    let mut lead: Vec<&str> = c.ranking[..2]
        .iter()
        .map(|r| r.characteristic.as_str())
        .collect();
    lead.sort();
    assert_eq!(lead, vec!["flange thickness", "hub length"]);
    for r in &c.per_characteristic {
        assert!(
            r.pooled_p > 0.05,
            "{} alone would not flag it (p = {})",
            r.characteristic,
            r.pooled_p
        );
    }
    // The pair with no shift is not flagged.
    assert!(!compare_samples("repeat-route-a.csv").hotelling.differ);
}

#[test]
fn the_owned_path_gives_exactly_the_borrowed_numbers() {
    // The command line centres the units in place (compare_owned); the window works on
    // borrowed units (compare). A signed summary made by one is recomputed by the other, so
    // every number must agree to the last bit.
    let mut rng = Rng(19);
    let x = rng.lot(60, 4, 0.0).map(|v| 1000.0 + v);
    let y = rng.lot(45, 4, 0.3).map(|v| 1000.0 + v);
    let settings = Settings {
        permutations: 499,
        ..Settings::default()
    };
    let borrowed = analysis::compare(
        &names(4),
        &[None, None, None, None],
        [
            LotData {
                name: "a",
                data: &x,
            },
            LotData {
                name: "b",
                data: &y,
            },
        ],
        &settings,
        &Silent,
    )
    .unwrap();
    let owned = analysis::compare_owned(
        &names(4),
        &[None, None, None, None],
        ["a", "b"],
        [x.clone(), y.clone()],
        &settings,
        &Silent,
    )
    .unwrap();
    assert_eq!(
        serde_json::to_string(&borrowed).unwrap(),
        serde_json::to_string(&owned).unwrap()
    );
    // The window's staged path: the result first, the permutation p-value added after.
    let mut staged = analysis::compare(
        &names(4),
        &[None, None, None, None],
        [
            LotData {
                name: "a",
                data: &x,
            },
            LotData {
                name: "b",
                data: &y,
            },
        ],
        &Settings {
            permutations: 0,
            ..settings.clone()
        },
        &Silent,
    )
    .unwrap();
    let mut staged_owned = staged.clone();
    analysis::add_permutation(&mut staged, [&x, &y], &settings, &Silent).unwrap();
    assert_eq!(
        serde_json::to_string(&borrowed).unwrap(),
        serde_json::to_string(&staged).unwrap()
    );
    // The window's way: the units given up and centred in place, the same to the last bit.
    analysis::add_permutation_owned(
        &mut staged_owned,
        [x.clone(), y.clone()],
        &settings,
        &Silent,
    )
    .unwrap();
    assert_eq!(
        serde_json::to_string(&staged).unwrap(),
        serde_json::to_string(&staged_owned).unwrap()
    );
}

/// The detectable shift is the distance at which the T² test's power is exactly 80% (the
/// definition; the power itself is checked against scipy.stats.ncf in the stats tests), and
/// more units detect a smaller shift.
#[test]
fn the_detectable_shift_has_the_stated_power() {
    use lotshift::analysis::detectable_distance;
    use lotshift::stats::power::power;
    for (p, n1, n2) in [(5, 39, 40), (2, 10, 12), (12, 200, 150)] {
        let d = detectable_distance(p, n1, n2, 0.05, 0.8).unwrap();
        let pw = power(p, n1, n2, d * d, 0.05);
        assert!((pw - 0.8).abs() < 1e-6, "{p} {n1} {n2}: {pw}");
        let bigger = detectable_distance(p, 2 * n1, 2 * n2, 0.05, 0.8).unwrap();
        assert!(bigger < d);
    }
    // Too few units for a test: no detectable shift.
    assert_eq!(detectable_distance(5, 3, 3, 0.05, 0.8), None);
}

/// A planted outlier is flagged, and the T² "without the flagged units" (computed by taking
/// the units out of the moments) equals the T² of the lots with those rows deleted and
/// compared afresh (the same statistic, two ways).
#[test]
fn the_t2_without_outliers_is_the_t2_of_the_lots_without_them() {
    let mut rng = Rng(99);
    let x = rng.lot(40, 3, 0.0);
    let mut y = rng.lot(35, 3, 0.15);
    for k in 0..3 {
        y[(7, k)] += 9.0 * (1.0 + k as f64);
    }
    let c = run(&x, &y, 0.05).unwrap();
    let o = c.outliers.as_ref().unwrap();
    assert!(o.units.iter().any(|u| u.lot == 1 && u.unit == 7), "{o:?}");
    let w = c
        .without_outliers
        .as_ref()
        .expect("rerun without the outliers");
    let drop = |m: &DMatrix<f64>, lot: usize| {
        let rows: Vec<usize> = (0..m.nrows())
            .filter(|&i| !o.units.iter().any(|u| u.lot == lot && u.unit == i))
            .collect();
        DMatrix::from_fn(rows.len(), m.ncols(), |i, k| m[(rows[i], k)])
    };
    let again = run(&drop(&x, 0), &drop(&y, 1), 0.05).unwrap();
    assert!(
        (w.t2 - again.hotelling.t2).abs() < 1e-9 * again.hotelling.t2,
        "{} vs {}",
        w.t2,
        again.hotelling.t2
    );
    assert_eq!(w.differ, again.hotelling.differ);
    assert!(c.verdict.contains("flagged as outliers"), "{}", c.verdict);
}
