//! The assumption checks and their alternatives, shown to behave as the methods promise:
//! simulations with seeded data (false-alarm rates, uniform permutation p-values, power), an
//! exact enumeration, and located outliers.

use crate::common;
use common::names;

use lotshift::analysis::{self, LotData, Settings, Silent};
use lotshift::stats::permutation::{SplitMix64, permutation_test_data};
use lotshift::stats::power;
use nalgebra::DMatrix;

struct Rng(SplitMix64);

impl Rng {
    fn new(seed: u64) -> Self {
        Rng(SplitMix64(seed))
    }
    fn uniform(&mut self) -> f64 {
        ((self.0.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
    /// `n × p` normal units with independent characteristics of SD `sd`, means `mean`.
    fn lot(&mut self, n: usize, p: usize, sd: f64, mean: f64) -> DMatrix<f64> {
        DMatrix::from_fn(n, p, |_, _| mean + sd * self.normal())
    }
}

fn compare(x: &DMatrix<f64>, y: &DMatrix<f64>, settings: &Settings) -> analysis::Comparison {
    let p = x.ncols();
    analysis::compare(
        &names(p),
        &vec![None; p],
        [
            LotData { name: "1", data: x },
            LotData { name: "2", data: y },
        ],
        settings,
        &Silent,
    )
    .unwrap()
}

/// 99% binomial band half-width around `rate` for `trials` trials.
fn band(rate: f64, trials: usize) -> f64 {
    2.576 * (rate * (1.0 - rate) / trials as f64).sqrt()
}

fn quick() -> Settings {
    Settings {
        leave_one_out: false,
        checks: true,
        permutations: 0,
        ..Settings::default()
    }
}

#[test]
fn unequal_covariances_and_sizes_inflate_pooled_t2_but_not_the_approximate_df_test() {
    // Simulation: the small lot has 3x the standard deviation of the large one, equal means.
    // The pooled T² then rejects far more often than alpha (a known fact: J&W §6.3 discuss
    // it, from memory); the Krishnamoorthy–Yu test stays near alpha.
    let mut rng = Rng::new(21);
    let trials = 2000;
    let (mut pooled, mut ky) = (0, 0);
    for _ in 0..trials {
        let x = rng.lot(10, 3, 3.0, 0.0);
        let y = rng.lot(40, 3, 1.0, 0.0);
        let c = compare(&x, &y, &quick());
        pooled += usize::from(c.hotelling.p_value < 0.05);
        ky += usize::from(c.unequal_covariance.unwrap().p_value < 0.05);
    }
    let (rp, rk) = (pooled as f64 / trials as f64, ky as f64 / trials as f64);
    assert!(rp > 0.15, "pooled T² false-alarm rate {rp}");
    // The df is an approximation: allow the 99% band plus 0.01.
    assert!(
        (rk - 0.05).abs() < band(0.05, trials) + 0.01,
        "Krishnamoorthy–Yu rate {rk}"
    );
}

#[test]
fn the_checks_favour_the_unequal_covariance_test_when_they_should() {
    let mut rng = Rng::new(22);
    let x = rng.lot(15, 3, 4.0, 0.0);
    let y = rng.lot(60, 3, 1.0, 0.0);
    let c = compare(&x, &y, &quick());
    assert!(c.box_m.as_ref().unwrap().preferred_p_value() < 0.001);
    assert_eq!(c.favoured.test.name(), "unequal-covariance test");
    assert!(
        c.verdict.contains("favour the unequal-covariance test"),
        "{}",
        c.verdict
    );
    // Equal covariances: the pooled test stays.
    let x = rng.lot(30, 3, 1.0, 0.0);
    let y = rng.lot(35, 3, 1.0, 0.0);
    assert_eq!(compare(&x, &y, &quick()).favoured.test.name(), "pooled T²");
}

#[test]
fn box_m_holds_its_level_under_equal_covariances() {
    // Simulation: equal covariance matrices, normal lots; the preferred approximation's
    // rejection rate at 0.05 lies in the 99% band (plus 0.01 for the approximation).
    let mut rng = Rng::new(23);
    let trials = 1500;
    let mut rejected = 0;
    for _ in 0..trials {
        let x = rng.lot(25, 3, 1.0, 0.0);
        let y = rng.lot(35, 3, 1.0, 0.0);
        let c = compare(&x, &y, &quick());
        rejected += usize::from(c.box_m.unwrap().preferred_p_value() < 0.05);
    }
    let rate = rejected as f64 / trials as f64;
    assert!(
        (rate - 0.05).abs() < band(0.05, trials) + 0.01,
        "Box's M rate {rate}"
    );
}

#[test]
fn permutation_p_values_are_uniform_under_the_null() {
    // Simulation: 400 null pairs, 199 relabellings each. Under the null the p-value is
    // uniform on {1/200, ..., 1}: about 5% fall at or below 0.05 and the mean is about 0.5.
    let mut rng = Rng::new(24);
    let trials = 400;
    let mut ps = Vec::new();
    for t in 0..trials {
        let x = rng.lot(12, 2, 1.0, 0.0);
        let y = rng.lot(15, 2, 1.0, 0.0);
        ps.push(
            permutation_test_data(&x, &y, 199, t as u64)
                .unwrap()
                .p_value,
        );
    }
    let low = ps.iter().filter(|&&p| p <= 0.05).count() as f64 / trials as f64;
    let mean = ps.iter().sum::<f64>() / trials as f64;
    assert!(
        (low - 0.05).abs() < band(0.05, trials),
        "share below 0.05: {low}"
    );
    // The mean of a uniform on (0, 1] over 400 draws has SD 0.0144; allow 3 SD.
    assert!((mean - 0.5).abs() < 0.045, "mean p {mean}");
}

#[test]
fn permutation_p_value_agrees_with_full_enumeration() {
    // Exact: with 4 + 4 units there are C(8, 4) = 70 relabellings; the exact permutation
    // p-value is the share of them whose T² reaches the observed one. The Monte Carlo
    // estimate with 20,000 draws lies in the 99% band around it.
    let x = DMatrix::from_row_slice(4, 2, &[1.0, 2.0, 2.5, 1.1, 3.0, 3.2, 1.8, 2.6]);
    let y = DMatrix::from_row_slice(4, 2, &[3.1, 3.0, 4.2, 2.2, 3.9, 4.1, 2.8, 3.7]);
    let all = DMatrix::from_fn(8, 2, |i, k| if i < 4 { x[(i, k)] } else { y[(i - 4, k)] });
    let t2 = |first: &[usize]| {
        let second: Vec<usize> = (0..8).filter(|i| !first.contains(i)).collect();
        let a = all.select_rows(first);
        let b = all.select_rows(&second);
        compare(
            &a,
            &b,
            &Settings {
                checks: false,
                ..quick()
            },
        )
        .hotelling
        .t2
    };
    let observed = t2(&[0, 1, 2, 3]);
    let mut reach = 0;
    let mut total = 0;
    for mask in 0u32..256 {
        if mask.count_ones() != 4 {
            continue;
        }
        let first: Vec<usize> = (0..8).filter(|i| mask & (1 << i) != 0).collect();
        total += 1;
        if t2(&first) >= observed * (1.0 - 1e-9) {
            reach += 1;
        }
    }
    assert_eq!(total, 70);
    let exact = reach as f64 / total as f64;
    let mc = permutation_test_data(&x, &y, 20_000, 7).unwrap().p_value;
    assert!(
        (mc - exact).abs() < band(exact, 20_000) + 1e-4,
        "exact {exact}, Monte Carlo {mc}"
    );
}

#[test]
fn simulated_power_matches_the_noncentral_f() {
    // Simulation: true shift of 0.6 SD in each of 3 independent characteristics
    // (Mahalanobis distance² = 3·0.36), 15 units per lot; the rejection rate lies in the 99%
    // band around the noncentral F power.
    let mut rng = Rng::new(25);
    let trials = 2000;
    let predicted = power::power(3, 15, 15, 3.0 * 0.36, 0.05);
    let mut rejected = 0;
    for _ in 0..trials {
        let x = rng.lot(15, 3, 1.0, 0.0);
        let y = rng.lot(15, 3, 1.0, 0.6);
        let c = compare(
            &x,
            &y,
            &Settings {
                checks: false,
                ..quick()
            },
        );
        rejected += usize::from(c.hotelling.differ);
    }
    let rate = rejected as f64 / trials as f64;
    assert!(
        (rate - predicted).abs() < band(predicted, trials),
        "simulated {rate}, predicted {predicted}"
    );
}

#[test]
fn mardia_is_affine_invariant_and_flags_skewed_lots() {
    // Property: b1 and b2 are unchanged by a non-singular affine map of the lot.
    let mut rng = Rng::new(26);
    let x = rng.lot(80, 3, 1.0, 0.0);
    let y = rng.lot(70, 3, 1.0, 0.0);
    let map = |m: &DMatrix<f64>| {
        DMatrix::from_fn(m.nrows(), 3, |i, k| match k {
            0 => 2.0 * m[(i, 0)] + m[(i, 1)] + 100.0,
            1 => m[(i, 1)] - 0.5 * m[(i, 2)],
            _ => 0.1 * m[(i, 2)] + m[(i, 0)],
        })
    };
    let a = compare(&x, &y, &quick());
    let b = compare(&map(&x), &map(&y), &quick());
    for g in 0..2 {
        assert!(
            (a.mardia[g].skewness - b.mardia[g].skewness).abs()
                < 1e-9 * a.mardia[g].skewness.max(1e-3)
        );
        assert!((a.mardia[g].kurtosis - b.mardia[g].kurtosis).abs() < 1e-9 * a.mardia[g].kurtosis);
    }
    // Strongly skewed units (exponential) are flagged.
    let skewed = DMatrix::from_fn(200, 3, |_, _| -rng.uniform().ln());
    let c = compare(&skewed, &y, &quick());
    assert!(c.mardia[0].skewness_p < 1e-6);
    assert_eq!(
        c.favoured.test.name(),
        "pooled T²",
        "no permutation run, so nothing else to favour"
    );
    let c = compare(
        &skewed,
        &y,
        &Settings {
            permutations: 999,
            ..quick()
        },
    );
    assert_eq!(c.favoured.test.name(), "permutation p-value");
}

#[test]
fn a_planted_outlier_is_flagged_with_its_row_and_serial() {
    // CLI end to end: one unit 8 SD off in two characteristics.
    let dir = std::env::temp_dir().join(format!("lotshift-outlier-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut rng = Rng::new(27);
    let mut a = String::from("serial,x,y,z\n");
    for i in 0..60 {
        let (mut u, mut v, w) = (rng.normal(), rng.normal(), rng.normal());
        if i == 41 {
            u += 8.0;
            v -= 8.0;
        }
        a.push_str(&format!("S-{i:03},{u:.4},{v:.4},{w:.4}\n"));
    }
    let mut b = String::from("serial,x,y,z\n");
    for i in 0..50 {
        b.push_str(&format!(
            "T-{i:03},{:.4},{:.4},{:.4}\n",
            rng.normal(),
            rng.normal(),
            rng.normal()
        ));
    }
    std::fs::write(dir.join("a.csv"), a).unwrap();
    std::fs::write(dir.join("b.csv"), b).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_lotshift"))
        .args([
            "compare",
            "a.csv",
            "b.csv",
            "--json",
            "-",
            "--permutations",
            "0",
        ])
        .current_dir(&dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rec: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let units = rec["outliers"]["units"].as_array().unwrap();
    assert_eq!(units.len(), 1, "{units:?}");
    assert_eq!(units[0]["lot"], 0);
    assert_eq!(units[0]["row"], 43, "unit 41 is on spreadsheet row 43");
    assert_eq!(
        units[0]["labels"][0],
        serde_json::json!(["serial", "S-041"])
    );
    std::fs::remove_dir_all(dir).unwrap();
}

/// Above Shapiro–Wilk's range (5,000 units) Anderson–Darling and K² stand in for it for every
/// characteristic of both lots, and nothing says a normality check was not computed.
#[test]
fn big_lots_get_the_large_lot_checks_and_no_not_computed_line() {
    let mut rng = Rng::new(77);
    let x = rng.lot(6_000, 3, 1.0, 10.0);
    let y = rng.lot(7_000, 3, 1.0, 10.0);
    let settings = Settings {
        permutations: 0,
        ..Settings::default()
    };
    let c = compare(&x, &y, &settings);
    assert_eq!(c.normality.len(), 3);
    for row in &c.normality {
        assert!(
            row.lots.iter().all(Option::is_none),
            "Shapiro–Wilk beyond its range"
        );
        assert!(row.large.iter().all(Option::is_some), "{row:?}");
    }
    let skipped = analysis::checks_not_computed(&c);
    assert!(
        skipped.iter().all(|s| !s.contains("Shapiro")),
        "{skipped:?}"
    );
}
