//! Equivalence (two one-sided tests, the multivariate T² equivalence test, the noncentral F)
//! and capability (indices, expected and observed fractions out of specification, the
//! fraction of units inside every limit) against outside references: a published example,
//! numpy/scipy/statsmodels/mpmath fixtures (tests/fixtures/equivalence.json, written by
//! tests/fixtures/make_equivalence_fixtures.py), mathematical identities, and seeded
//! simulations whose expected rates follow from the definition of a level-alpha test.

use lotshift::stats::capability::{
    self, CapabilityError, QmcSettings, SpecLimits, capability, capability_moments,
    fraction_inside, observed_out_of_spec,
};
use lotshift::stats::equivalence::{
    self, EquivalenceError, SampleStats, VarianceModel, distance_upper_bound, epsilon_from_margins,
    margin_half_width, ncf_lower_tail, ncf_quantile, ncf_upper_tail, t2_equivalence,
    t2_equivalence_from_distance, t2_equivalence_power, t2_equivalence_units_per_lot, tost,
    tost_moments, tost_power, tost_units_per_lot,
};
use lotshift::stats::hotelling::Pooled;
use lotshift::stats::moments::LotMoments;
use lotshift::stats::permutation::SplitMix64;
use nalgebra::{DMatrix, DVector};
use serde_json::Value;

fn fixtures() -> Value {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/equivalence.json"
    ))
    .expect("fixture file");
    serde_json::from_str(&text).expect("fixture JSON")
}

fn num(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("not a number in the fixture: {v}"))
}

fn usize_of(v: &Value) -> usize {
    v.as_u64().expect("integer in the fixture") as usize
}

/// A fixture number, `None` for JSON null (an absent limit).
fn opt(v: &Value) -> Option<f64> {
    v.as_f64()
}

fn matrix(v: &Value) -> DMatrix<f64> {
    let rows = v.as_array().unwrap();
    let p = rows[0].as_array().unwrap().len();
    DMatrix::from_fn(rows.len(), p, |i, j| num(&rows[i][j]))
}

#[track_caller]
fn close(got: f64, want: f64, rel: f64, what: &str) {
    let err = (got - want).abs();
    assert!(
        err <= rel * want.abs() || got == want,
        "{what}: got {got:e}, want {want:e} (rel {:e})",
        err / want.abs()
    );
}

#[track_caller]
fn close_abs(got: f64, want: f64, abs: f64, what: &str) {
    assert!(
        (got - want).abs() <= abs,
        "{what}: got {got:e}, want {want:e} (abs {:e})",
        (got - want).abs()
    );
}

/// Both lots' moments from unit data, sharing the first unit of the first lot as origin (as
/// the engine does).
fn moments_pair(x: &DMatrix<f64>, y: &DMatrix<f64>) -> (LotMoments, LotMoments) {
    let origin = x.row(0).transpose();
    let (m1, _) = LotMoments::from_data_centred(x, &origin);
    let (m2, _) = LotMoments::from_data_centred(y, &origin);
    (m1, m2)
}

fn names(p: usize) -> Vec<String> {
    (0..p).map(|k| format!("c{k}")).collect()
}

/// Standard normal draws by Box–Muller from SplitMix64 (seeded, reproducible).
struct Normal {
    rng: SplitMix64,
    spare: Option<f64>,
}

impl Normal {
    fn new(seed: u64) -> Self {
        Normal {
            rng: SplitMix64(seed),
            spare: None,
        }
    }

    fn uniform(&mut self) -> f64 {
        // (0, 1]: never zero, so the logarithm is finite.
        ((self.rng.next_u64() >> 11) + 1) as f64 / (1u64 << 53) as f64
    }

    fn next(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let r = (-2.0 * self.uniform().ln()).sqrt();
        let t = std::f64::consts::TAU * self.uniform();
        self.spare = Some(r * t.sin());
        r * t.cos()
    }
}

/// Upper end of the two-sided 99% band of a binomial rate `alpha` over `reps` trials
/// (normal approximation, z = 2.5758).
fn band99(alpha: f64, reps: usize) -> f64 {
    2.5758 * (alpha * (1.0 - alpha) / reps as f64).sqrt()
}

// ---------------------------------------------------------------------------------------
// Two one-sided tests
// ---------------------------------------------------------------------------------------

fn stats_of(v: &[f64]) -> SampleStats {
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let variance = v.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0);
    SampleStats {
        n: v.len(),
        mean,
        variance,
    }
}

#[test]
#[allow(clippy::approx_constant)] // 3.14 is a measurement in the data, not π
fn tost_matches_the_published_example() {
    // The example of R's `equivalence` package as used in statsmodels' test suite for
    // `ttost_ind` (statsmodels/stats/tests/test_weightstats.py), printed to about ten digits:
    // Welch p = 0.04853083976 on 26.74847876 df, 90% interval −0.26668630 to 0.59601963;
    // pooled p = 0.04827315101 on 28 df, −0.26599606 to 0.59532940; margin ±0.6 on x1 − x2.
    let x1 = [
        2.84, 2.51, 2.41, 2.95, 3.14, 3.79, 4.14, 3.85, 3.02, 3.45, 5.37, 3.81, 4.19, 3.16, 3.84,
    ];
    let x2 = [
        2.60, 2.82, 2.18, 3.46, 4.01, 3.04, 3.47, 4.06, 2.91, 3.59, 4.51, 3.16, 3.86, 3.31, 3.02,
    ];
    let (a, b) = (stats_of(&x1), stats_of(&x2));
    let welch = tost(a, b, [-0.6, 0.6], 0.05, VarianceModel::Welch).unwrap();
    close_abs(welch.p_value, 0.04853083976, 1e-9, "Welch p");
    close_abs(welch.df, 26.74847876, 1e-8, "Welch df");
    close_abs(welch.interval[0], -0.26668630, 1e-8, "Welch interval lower");
    close_abs(welch.interval[1], 0.59601963, 1e-8, "Welch interval upper");
    assert!(welch.equivalent);
    let pooled = tost(a, b, [-0.6, 0.6], 0.05, VarianceModel::Pooled).unwrap();
    close_abs(pooled.p_value, 0.04827315101, 1e-9, "pooled p");
    assert_eq!(pooled.df, 28.0);
    close_abs(
        pooled.interval[0],
        -0.26599606,
        1e-8,
        "pooled interval lower",
    );
    close_abs(
        pooled.interval[1],
        0.59532940,
        1e-8,
        "pooled interval upper",
    );
    assert!(pooled.equivalent);
    // The same through the engine's moments (a shared origin, offsets, centred sums).
    let x = DMatrix::from_column_slice(x1.len(), 1, &x1);
    let y = DMatrix::from_column_slice(x2.len(), 1, &x2);
    let (m1, m2) = moments_pair(&x, &y);
    for (model, want) in [
        (VarianceModel::Welch, welch),
        (VarianceModel::Pooled, pooled),
    ] {
        let got = tost_moments(&m1, &m2, 0, [-0.6, 0.6], 0.05, model).unwrap();
        close(got.p_value, want.p_value, 1e-12, "moments p");
        close(got.interval[1], want.interval[1], 1e-12, "moments interval");
    }
}

#[test]
fn tost_matches_statsmodels() {
    // statsmodels.stats.weightstats.ttost_ind and CompareMeans.tconfint_diff, fixture
    // written by tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    let cases = fx["tost"].as_array().unwrap();
    assert!(cases.len() >= 80);
    for (i, c) in cases.iter().enumerate() {
        let a = SampleStats {
            n: usize_of(&c["n_a"]),
            mean: num(&c["mean_a"]),
            variance: num(&c["var_a"]),
        };
        let b = SampleStats {
            n: usize_of(&c["n_b"]),
            mean: num(&c["mean_b"]),
            variance: num(&c["var_b"]),
        };
        let model = match c["model"].as_str().unwrap() {
            "pooled" => VarianceModel::Pooled,
            _ => VarianceModel::Welch,
        };
        let margin = [num(&c["lo"]), num(&c["hi"])];
        let alpha = num(&c["alpha"]);
        let r = tost(a, b, margin, alpha, model).unwrap();
        let what = |k: &str| format!("tost case {i} ({model:?}) {k}");
        close(
            r.difference,
            num(&c["difference"]),
            1e-12,
            &what("difference"),
        );
        close(r.df, num(&c["df"]), 1e-12, &what("df"));
        close(r.t_lower, num(&c["t_lower"]), 1e-11, &what("t_lower"));
        close(r.t_upper, num(&c["t_upper"]), 1e-11, &what("t_upper"));
        close(r.p_lower, num(&c["p_lower"]), 1e-9, &what("p_lower"));
        close(r.p_upper, num(&c["p_upper"]), 1e-9, &what("p_upper"));
        close(r.p_value, num(&c["p_value"]), 1e-9, &what("p_value"));
        close(
            r.interval[0],
            num(&c["interval"][0]),
            1e-9,
            &what("interval lower"),
        );
        close(
            r.interval[1],
            num(&c["interval"][1]),
            1e-9,
            &what("interval upper"),
        );
        assert_eq!(
            r.equivalent,
            c["equivalent"].as_bool().unwrap(),
            "{}",
            what("decision")
        );
    }
}

#[test]
fn tost_rejects_exactly_when_the_interval_lies_inside_the_margin() {
    // Schuirmann (1987): both one-sided level-alpha tests reject exactly when the 1 − 2 alpha
    // interval d ± t_{1−α} se lies inside the margin. Seeded random cases, both models,
    // many near the boundary.
    let mut g = Normal::new(0xD0A1_17E5);
    let mut near = 0;
    for case in 0..3000 {
        let na = 2 + (g.uniform() * 60.0) as usize;
        let nb = 2 + (g.uniform() * 60.0) as usize;
        let a = SampleStats {
            n: na,
            mean: 3.0 * g.next(),
            variance: (0.5 * g.next()).exp(),
        };
        let b = SampleStats {
            n: nb,
            mean: 3.0 * g.next(),
            variance: (0.5 * g.next()).exp(),
        };
        let d = a.mean - b.mean;
        // Margins placed around the observed difference so that both outcomes occur often.
        let spread = 0.2 + g.uniform() * 2.0;
        let lo = d - spread * (0.2 + g.uniform());
        let hi = d + spread * (0.2 + g.uniform());
        let alpha = [0.05, 0.1, 0.025, 0.2][case % 4];
        for model in [VarianceModel::Pooled, VarianceModel::Welch] {
            let r = tost(a, b, [lo, hi], alpha, model).unwrap();
            let inside = r.interval[0] > lo && r.interval[1] < hi;
            let gap = (r.interval[0] - lo).abs().min((hi - r.interval[1]).abs());
            if gap < 1e-12 * (hi - lo) {
                continue; // a tie at rounding level: either answer is right
            }
            if (r.p_value - alpha).abs() < 0.1 * alpha {
                near += 1;
            }
            assert_eq!(
                r.equivalent, inside,
                "case {case} {model:?}: p {} alpha {alpha} interval {:?} margin {lo} {hi}",
                r.p_value, r.interval
            );
            assert_eq!(r.p_value, r.p_lower.max(r.p_upper));
        }
    }
    assert!(near > 100, "only {near} cases near the boundary");
}

#[test]
fn tost_size_at_the_margin_is_alpha() {
    // Definition of a level-alpha test: with the true difference on the margin, TOST rejects
    // at most at rate alpha; with the margin wide against the standard error the other
    // one-sided test always rejects and the rate is alpha itself (exactly for the pooled
    // test under equal variances). Seeded pairs of normal lots; 99% binomial band.
    let alpha = 0.05;
    let reps = 4000;
    let mut g = Normal::new(0x7057_0001);
    // Pooled, equal variances, true difference at the upper end of a wide margin.
    let (na, nb, sigma, margin) = (12usize, 15usize, 1.0, [-6.0, 1.0]);
    let mut xa = vec![0.0; na];
    let mut xb = vec![0.0; nb];
    let mut rejected = 0;
    for _ in 0..reps {
        xa.iter_mut()
            .for_each(|v| *v = margin[1] + sigma * g.next());
        xb.iter_mut().for_each(|v| *v = sigma * g.next());
        let r = tost(
            stats_of(&xa),
            stats_of(&xb),
            margin,
            alpha,
            VarianceModel::Pooled,
        )
        .unwrap();
        rejected += usize::from(r.equivalent);
    }
    let rate = rejected as f64 / reps as f64;
    assert!(
        (rate - alpha).abs() <= band99(alpha, reps),
        "pooled rate {rate}"
    );
    // Welch, unequal variances and sizes, true difference at the lower end of a narrow
    // margin: at most alpha.
    let (na, nb, margin) = (8usize, 20usize, [-0.8, 0.8]);
    let mut xa = vec![0.0; na];
    let mut xb = vec![0.0; nb];
    let mut rejected = 0;
    for _ in 0..reps {
        xa.iter_mut().for_each(|v| *v = margin[0] + 0.7 * g.next());
        xb.iter_mut().for_each(|v| *v = 0.3 * g.next());
        let r = tost(
            stats_of(&xa),
            stats_of(&xb),
            margin,
            alpha,
            VarianceModel::Welch,
        )
        .unwrap();
        rejected += usize::from(r.equivalent);
    }
    let rate = rejected as f64 / reps as f64;
    assert!(rate <= alpha + band99(alpha, reps), "Welch rate {rate}");
}

#[test]
fn tost_power_matches_quadrature_and_simulation() {
    // Exact power by scipy.integrate.quad over the chi-square variable of the pooled
    // variance, units per lot by a search with it, and seeded numpy simulations of the test;
    // fixture written by tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    let t = &fx["tost_power"];
    for (i, c) in t["power"].as_array().unwrap().iter().enumerate() {
        let got = tost_power(
            num(&c["theta"]),
            num(&c["sigma"]),
            usize_of(&c["n_a"]),
            usize_of(&c["n_b"]),
            [num(&c["lo"]), num(&c["hi"])],
            num(&c["alpha"]),
        )
        .unwrap();
        close(got, num(&c["power"]), 1e-9, &format!("TOST power case {i}"));
    }
    for (i, c) in t["units"].as_array().unwrap().iter().enumerate() {
        let got = tost_units_per_lot(
            num(&c["theta"]),
            num(&c["sigma"]),
            [num(&c["lo"]), num(&c["hi"])],
            num(&c["alpha"]),
            num(&c["target"]),
        );
        assert_eq!(got, Some(usize_of(&c["units"])), "TOST units case {i}");
    }
    for (i, c) in t["simulation"].as_array().unwrap().iter().enumerate() {
        let got = tost_power(
            num(&c["theta"]),
            num(&c["sigma"]),
            usize_of(&c["n_a"]),
            usize_of(&c["n_b"]),
            [num(&c["lo"]), num(&c["hi"])],
            num(&c["alpha"]),
        )
        .unwrap();
        // 99.9% binomial band of the simulated rate.
        close_abs(
            got,
            num(&c["rate"]),
            3.29 * num(&c["se"]),
            &format!("TOST simulation {i}"),
        );
    }
    // Outside the margin the plan has no answer.
    assert_eq!(tost_units_per_lot(1.0, 1.0, [-1.0, 1.0], 0.05, 0.8), None);
}

#[test]
fn tost_rejects_bad_input() {
    let a = SampleStats {
        n: 5,
        mean: 1.0,
        variance: 1.0,
    };
    let one = SampleStats { n: 1, ..a };
    let flat = SampleStats { variance: 0.0, ..a };
    let m = VarianceModel::Pooled;
    assert!(matches!(
        tost(a, a, [-1.0, 1.0], 0.5, m),
        Err(EquivalenceError::BadAlpha { .. })
    ));
    assert!(matches!(
        tost(a, a, [1.0, -1.0], 0.05, m),
        Err(EquivalenceError::BadMargin { .. })
    ));
    assert!(matches!(
        tost(one, a, [-1.0, 1.0], 0.05, VarianceModel::Welch),
        Err(EquivalenceError::TooFewUnits { .. })
    ));
    assert!(tost(one, a, [-1.0, 1.0], 0.05, m).is_ok());
    assert!(matches!(
        tost(flat, flat, [-1.0, 1.0], 0.05, m),
        Err(EquivalenceError::NoSpread(_))
    ));
    assert!(matches!(
        margin_half_width([0.5, 1.0]),
        Err(EquivalenceError::MarginExcludesZero { .. })
    ));
    assert_eq!(margin_half_width([-0.7, 0.4]).unwrap(), 0.4);
}

// ---------------------------------------------------------------------------------------
// Noncentral F
// ---------------------------------------------------------------------------------------

#[test]
fn noncentral_f_matches_scipy() {
    // scipy.stats.ncf.cdf and .sf (Boost) at points from scipy.stats.ncf.ppf, fixture written
    // by tests/fixtures/make_equivalence_fixtures.py. Each tail is compared relatively.
    let fx = fixtures();
    let cases = fx["ncf"].as_array().unwrap();
    assert!(cases.len() > 400);
    for (i, c) in cases.iter().enumerate() {
        let (x, d1, d2, lam) = (num(&c["x"]), num(&c["d1"]), num(&c["d2"]), num(&c["lam"]));
        let what = format!("ncf case {i} (x {x}, {d1}, {d2}, λ {lam})");
        close(
            ncf_lower_tail(x, d1, d2, lam),
            num(&c["cdf"]),
            1e-9,
            &format!("{what} cdf"),
        );
        close(
            ncf_upper_tail(x, d1, d2, lam),
            num(&c["sf"]),
            1e-9,
            &format!("{what} sf"),
        );
    }
}

#[test]
fn noncentral_f_far_tails_match_mpmath() {
    // 40-digit mpmath sums of the Poisson mixture (fixture written by
    // tests/fixtures/make_equivalence_fixtures.py), including tails below 1e-300 by their
    // logarithms.
    let fx = fixtures();
    for (i, c) in fx["ncf_mp"].as_array().unwrap().iter().enumerate() {
        let (x, d1, d2, lam) = (num(&c["x"]), num(&c["d1"]), num(&c["d2"]), num(&c["lam"]));
        let what = format!("ncf_mp case {i} (x {x}, {d1}, {d2}, λ {lam})");
        let (lo, up) = (
            equivalence::ncf_ln_lower_tail(x, d1, d2, lam),
            equivalence::ncf_ln_upper_tail(x, d1, d2, lam),
        );
        // Logarithms, relatively: a tail near 1 has a logarithm near minus the other tail.
        close(lo, num(&c["ln_cdf"]), 1e-10, &format!("{what} ln cdf"));
        close(up, num(&c["ln_sf"]), 1e-10, &format!("{what} ln sf"));
        let (cdf, sf) = (num(&c["cdf"]), num(&c["sf"]));
        if cdf > 1e-300 {
            close(
                ncf_lower_tail(x, d1, d2, lam),
                cdf,
                1e-9,
                &format!("{what} cdf"),
            );
        }
        if sf > 1e-300 {
            close(
                ncf_upper_tail(x, d1, d2, lam),
                sf,
                1e-9,
                &format!("{what} sf"),
            );
        }
    }
}

#[test]
fn noncentral_f_quantile_matches_scipy_and_inverts() {
    // scipy.stats.ncf.ppf, fixture written by tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    for (i, c) in fx["ncf_quantile"].as_array().unwrap().iter().enumerate() {
        let (q, d1, d2, lam) = (num(&c["q"]), num(&c["d1"]), num(&c["d2"]), num(&c["lam"]));
        let got = ncf_quantile(q, d1, d2, lam);
        close(got, num(&c["x"]), 1e-9, &format!("ncf quantile case {i}"));
        // And the quantile inverts our own CDF (a round trip, not a reference value).
        close(
            ncf_lower_tail(got, d1, d2, lam),
            q,
            1e-11,
            &format!("round trip {i}"),
        );
    }
    assert!(ncf_quantile(0.0, 2.0, 10.0, 1.0).is_nan());
}

#[test]
fn noncentral_f_identities() {
    // λ = 0 is the central F; the two tails add to one; power::ncf_sf is the shared upper
    // tail; the lower tail falls as λ grows (stochastic ordering of the noncentral F).
    for &(f, d1, d2) in &[(0.7, 3.0, 20.0), (2.5, 1.0, 9.0), (4.0, 12.0, 400.0)] {
        close(
            ncf_upper_tail(f, d1, d2, 0.0),
            lotshift::stats::dist::f_sf(f, d1, d2),
            1e-13,
            "central F",
        );
        for lam in [0.01, 1.0, 30.0, 5000.0] {
            let (lo, up) = (
                ncf_lower_tail(f, d1, d2, lam),
                ncf_upper_tail(f, d1, d2, lam),
            );
            assert!((lo + up - 1.0).abs() < 1e-15, "{lo} + {up}");
            assert_eq!(lotshift::stats::power::ncf_sf(f, d1, d2, lam), up);
            assert!(
                equivalence::ncf_ln_lower_tail(f, d1, d2, lam * 1.1)
                    < equivalence::ncf_ln_lower_tail(f, d1, d2, lam)
            );
        }
    }
}

// ---------------------------------------------------------------------------------------
// Multivariate equivalence (Wellek 2010)
// ---------------------------------------------------------------------------------------

#[test]
fn wellek_test_matches_scipy() {
    // Unit data simulated by numpy; D² by numpy.linalg.solve, p-value scipy ncf.cdf,
    // critical value scipy ncf.ppf, the distance bound by scipy.optimize.brentq on
    // ncf.cdf(F; λ) = alpha, ε from margins by numpy.linalg.solve; fixture written by
    // tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    let cases = fx["t2_equivalence"].as_array().unwrap();
    assert!(cases.len() >= 20);
    for (i, c) in cases.iter().enumerate() {
        let (x, y) = (matrix(&c["x"]), matrix(&c["y"]));
        let p = x.ncols();
        let (m1, m2) = moments_pair(&x, &y);
        let pooled = Pooled::new(&m1, &m2, &names(p)).unwrap();
        let (eps, alpha) = (num(&c["epsilon"]), num(&c["alpha"]));
        let r = t2_equivalence(&m1, &m2, &pooled, eps, alpha).unwrap();
        let what = |k: &str| format!("Wellek case {i} (p {p}) {k}");
        close(r.distance * r.distance, num(&c["d2"]), 1e-10, &what("D²"));
        close(r.t2, num(&c["t2"]), 1e-10, &what("T²"));
        close(r.f, num(&c["f"]), 1e-10, &what("F"));
        assert_eq!(r.df1, num(&c["df1"]));
        assert_eq!(r.df2, num(&c["df2"]));
        close(r.lambda, num(&c["lam"]), 1e-13, &what("λ"));
        close(r.p_value, num(&c["p_value"]), 1e-9, &what("p-value"));
        close(
            r.critical_f,
            num(&c["critical_f"]),
            1e-9,
            &what("critical F"),
        );
        let bound = num(&c["upper_bound"]);
        if bound == 0.0 {
            assert_eq!(r.upper_bound, 0.0, "{}", what("bound"));
        } else {
            close(r.upper_bound, bound, 1e-9, &what("distance bound"));
        }
        assert_eq!(r.equivalent, r.p_value < alpha);
        let margins: Vec<[f64; 2]> = c["margins"]
            .as_array()
            .unwrap()
            .iter()
            .map(|m| [num(&m[0]), num(&m[1])])
            .collect();
        close(
            epsilon_from_margins(&pooled, &margins).unwrap(),
            num(&c["epsilon_from_margins"]),
            1e-10,
            &what("ε from margins"),
        );
    }
}

#[test]
fn wellek_rejects_exactly_when_the_distance_bound_is_below_epsilon() {
    // The CDF of the noncentral F at the observed F falls as λ grows, so the p-value at
    // margin ε is below alpha exactly when the upper 1 − alpha bound of Δ is below ε, and
    // exactly when F lies below the critical value. Seeded cases.
    let mut g = Normal::new(0x003E_11E4);
    let mut both = [0usize; 2];
    for case in 0..400 {
        let p = 1 + case % 6;
        let n1 = p + 1 + (g.uniform() * 80.0) as usize;
        let n2 = 2 + (g.uniform() * 80.0) as usize;
        let d2 = (g.uniform() * 1.5).powi(2);
        let eps = 0.2 + 1.5 * g.uniform();
        let alpha = [0.05, 0.1, 0.01, 0.2][case % 4];
        let r = t2_equivalence_from_distance(d2, p, n1, n2, eps, alpha).unwrap();
        if (r.upper_bound - eps).abs() < 1e-9 * eps {
            continue;
        }
        both[usize::from(r.equivalent)] += 1;
        assert_eq!(
            r.equivalent,
            r.upper_bound < eps,
            "case {case}: p {} bound {} eps {eps}",
            r.p_value,
            r.upper_bound
        );
        assert_eq!(
            r.equivalent,
            r.f < r.critical_f,
            "case {case} critical value"
        );
        // The bound is where the p-value crosses alpha.
        if r.upper_bound > 0.0 {
            let at = t2_equivalence_from_distance(d2, p, n1, n2, r.upper_bound, alpha).unwrap();
            close(
                at.p_value,
                alpha,
                1e-9,
                &format!("case {case} p at the bound"),
            );
        } else {
            assert!(r.equivalent);
        }
        assert_eq!(
            r.upper_bound,
            distance_upper_bound(r.f, r.df1, r.df2, n1, n2, alpha).unwrap()
        );
    }
    assert!(both[0] > 50 && both[1] > 50, "{both:?}");
}

#[test]
fn wellek_size_at_the_margin_is_alpha() {
    // At true Δ = ε the equivalence test is exact: it rejects at rate alpha. Seeded pairs of
    // normal lots (p = 3, correlated characteristics in different units); 99% binomial band.
    let (p, n1, n2, eps, alpha, reps) = (3usize, 12usize, 15usize, 1.2, 0.05, 3000usize);
    // Σ = A Aᵀ with A lower triangular; a shift with δᵀ Σ⁻¹ δ = ε² is A e ε for a unit e.
    let a = DMatrix::from_row_slice(3, 3, &[2.0, 0.0, 0.0, 0.6, 0.5, 0.0, -30.0, 10.0, 25.0]);
    let e = DVector::from_column_slice(&[0.6, -0.8, 0.0]);
    let shift = &a * &e * eps;
    let mut g = Normal::new(0x0E11_E451);
    let mut draw = |n: usize, shifted: bool| {
        let mut x = DMatrix::zeros(n, p);
        for i in 0..n {
            let z = DVector::from_fn(p, |_, _| g.next());
            let mut row = &a * z;
            row += DVector::from_element(p, 100.0);
            if shifted {
                row += &shift;
            }
            x.set_row(i, &row.transpose());
        }
        x
    };
    let mut rejected = 0;
    for rep in 0..reps {
        let x = draw(n1, true);
        let y = draw(n2, false);
        let (m1, m2) = moments_pair(&x, &y);
        let pooled = Pooled::new(&m1, &m2, &names(p)).unwrap();
        let d = &m1.offset - &m2.offset;
        let z = d.component_div(&pooled.sd);
        let d2 = z.dot(&pooled.solve_corr(&z));
        let n = (n1 + n2) as f64;
        let f = (n - p as f64 - 1.0) / ((n - 2.0) * p as f64) * (n1 * n2) as f64 / n * d2;
        let lam = (n1 * n2) as f64 / n * eps * eps;
        let reject = ncf_lower_tail(f, p as f64, n - p as f64 - 1.0, lam) < alpha;
        if rep < 40 {
            // The full test gives the same decision.
            let full = t2_equivalence(&m1, &m2, &pooled, eps, alpha).unwrap();
            assert_eq!(full.equivalent, reject);
            close(full.f, f, 1e-12, "F");
        }
        rejected += usize::from(reject);
    }
    let rate = rejected as f64 / reps as f64;
    assert!(
        (rate - alpha).abs() <= band99(alpha, reps),
        "rejection rate {rate} at Δ = ε"
    );
}

#[test]
fn wellek_power_matches_scipy_and_simulation() {
    // scipy ncf.ppf then ncf.cdf, units per lot by a search with those, and a seeded numpy
    // simulation of the whole test; fixture written by
    // tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    let t = &fx["t2_power"];
    for (i, c) in t["power"].as_array().unwrap().iter().enumerate() {
        let got = t2_equivalence_power(
            usize_of(&c["p"]),
            usize_of(&c["n1"]),
            usize_of(&c["n2"]),
            num(&c["delta"]),
            num(&c["epsilon"]),
            num(&c["alpha"]),
        )
        .unwrap();
        close(got, num(&c["power"]), 1e-9, &format!("T² power case {i}"));
    }
    for (i, c) in t["units"].as_array().unwrap().iter().enumerate() {
        let got = t2_equivalence_units_per_lot(
            usize_of(&c["p"]),
            num(&c["delta"]),
            num(&c["epsilon"]),
            num(&c["alpha"]),
            num(&c["target"]),
        );
        assert_eq!(got, Some(usize_of(&c["units"])), "T² units case {i}");
    }
    let s = &t["simulation"];
    let got = t2_equivalence_power(
        usize_of(&s["p"]),
        usize_of(&s["n1"]),
        usize_of(&s["n2"]),
        num(&s["delta"]),
        num(&s["epsilon"]),
        num(&s["alpha"]),
    )
    .unwrap();
    // 99.9% binomial band of the simulated rate.
    close_abs(got, num(&s["rate"]), 3.29 * num(&s["se"]), "T² simulation");
    // At Δ = ε the power is alpha (the size of the test).
    close(
        t2_equivalence_power(3, 20, 25, 0.9, 0.9, 0.05).unwrap(),
        0.05,
        1e-11,
        "power at the margin",
    );
    assert_eq!(t2_equivalence_units_per_lot(2, 1.0, 1.0, 0.05, 0.8), None);
}

// ---------------------------------------------------------------------------------------
// Capability
// ---------------------------------------------------------------------------------------

#[test]
fn capability_matches_scipy() {
    // scipy.stats.chi2.ppf, norm.ppf and norm.sf with the formulas of Chou, Owen & Borrego
    // (1990) and Bissell (1990); fixture written by
    // tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    for (i, c) in fx["capability"].as_array().unwrap().iter().enumerate() {
        let limits = SpecLimits {
            lower: opt(&c["lower"]),
            upper: opt(&c["upper"]),
        };
        let r = capability(
            usize_of(&c["n"]),
            num(&c["mean"]),
            num(&c["sd"]),
            limits,
            num(&c["alpha"]),
        )
        .unwrap();
        let what = |k: &str| format!("capability case {i} {k}");
        for (got, key) in [(r.cp, "cp"), (r.cpk, "cpk"), (r.cpu, "cpu"), (r.cpl, "cpl")] {
            match got {
                Some(e) => {
                    let want = &c[key];
                    close(e.value, num(&want[0]), 1e-12, &what(key));
                    close(e.lower, num(&want[1]), 1e-9, &what(&format!("{key} lower")));
                    close(e.upper, num(&want[2]), 1e-9, &what(&format!("{key} upper")));
                }
                None => assert!(c[key].is_null(), "{}", what(key)),
            }
        }
        match r.expected_above_ppm {
            Some(v) => close(v, num(&c["above_ppm"]), 1e-9, &what("above ppm")),
            None => assert!(c["above_ppm"].is_null()),
        }
        match r.expected_below_ppm {
            Some(v) => close(v, num(&c["below_ppm"]), 1e-9, &what("below ppm")),
            None => assert!(c["below_ppm"].is_null()),
        }
        close(r.expected_ppm, num(&c["expected_ppm"]), 1e-9, &what("ppm"));
    }
}

#[test]
fn quantiles_match_scipy() {
    // scipy.stats.norm.ppf and chi2.ppf; fixture written by
    // tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    for c in fx["quantiles"]["norm"].as_array().unwrap() {
        let q = num(&c["q"]);
        close(
            capability::norm_quantile(q),
            num(&c["z"]),
            1e-9,
            &format!("norm.ppf({q})"),
        );
    }
    for c in fx["quantiles"]["chi2"].as_array().unwrap() {
        let (q, k) = (num(&c["q"]), num(&c["k"]));
        close(
            capability::chi2_quantile(q, k),
            num(&c["x"]),
            1e-9,
            &format!("chi2.ppf({q}, {k})"),
        );
    }
}

#[test]
fn normal_and_f_tails_match_mpmath() {
    // 40-digit mpmath.ncdf and mpmath.betainc, fixture written by
    // tests/fixtures/make_equivalence_fixtures.py: the normal tail behind the expected ppm
    // and the QMC integrand, and central F tails where the beta variable is tiny (the
    // incomplete beta prefactor there).
    let fx = fixtures();
    for c in fx["quantiles"]["norm_sf"].as_array().unwrap() {
        let z = num(&c["z"]);
        close(
            lotshift::stats::dist::norm_sf(z),
            num(&c["sf"]),
            1e-14,
            &format!("norm_sf({z})"),
        );
    }
    for c in fx["f_far"].as_array().unwrap() {
        let (f, d1, d2) = (num(&c["f"]), num(&c["d1"]), num(&c["d2"]));
        close(
            lotshift::stats::dist::f_sf(f, d1, d2),
            num(&c["sf"]),
            1e-12,
            &format!("f_sf({f}, {d1}, {d2})"),
        );
    }
}

#[test]
fn observed_counts_match_numpy() {
    // numpy counts of the values strictly outside the limits (values on a limit are
    // inside), numpy mean and sd (ddof 1); fixture written by
    // tests/fixtures/make_equivalence_fixtures.py.
    let fx = fixtures();
    for (i, c) in fx["observed"].as_array().unwrap().iter().enumerate() {
        let values: Vec<f64> = c["values"].as_array().unwrap().iter().map(num).collect();
        let limits = SpecLimits {
            lower: opt(&c["lower"]),
            upper: opt(&c["upper"]),
        };
        let o = observed_out_of_spec(&values, limits);
        assert_eq!(o.n, values.len());
        assert_eq!(o.below, usize_of(&c["below"]), "case {i} below");
        assert_eq!(o.above, usize_of(&c["above"]), "case {i} above");
        close(
            o.ppm(),
            1e6 * (o.below + o.above) as f64 / values.len() as f64,
            1e-15,
            "ppm",
        );
        // The same lot through the engine's moments.
        let x = DMatrix::from_column_slice(values.len(), 1, &values);
        let (m, _) = LotMoments::from_data_centred(&x, &DVector::from_element(1, values[0]));
        let r = capability_moments(&m, 0, limits, 0.05).unwrap();
        close(r.mean, num(&c["mean"]), 1e-13, &format!("case {i} mean"));
        close(r.sd, num(&c["sd"]), 1e-12, &format!("case {i} sd"));
    }
    let nan = observed_out_of_spec(
        &[f64::NAN, 1.0, 9.0],
        SpecLimits {
            lower: Some(2.0),
            upper: None,
        },
    );
    assert_eq!((nan.n, nan.below, nan.above), (2, 1, 0));
}

#[test]
fn capability_rejects_bad_input() {
    let both = SpecLimits {
        lower: Some(1.0),
        upper: Some(2.0),
    };
    assert_eq!(
        capability(10, 1.5, 0.1, SpecLimits::default(), 0.05),
        Err(CapabilityError::NoLimits)
    );
    assert!(matches!(
        capability(
            10,
            1.5,
            0.1,
            SpecLimits {
                lower: Some(2.0),
                upper: Some(1.0)
            },
            0.05
        ),
        Err(CapabilityError::BadLimits { .. })
    ));
    assert_eq!(
        capability(1, 1.5, 0.1, both, 0.05),
        Err(CapabilityError::TooFewUnits(1))
    );
    assert_eq!(
        capability(5, 1.5, 0.0, both, 0.05),
        Err(CapabilityError::NoSpread(0.0))
    );
    assert_eq!(
        capability(5, 1.5, 0.1, both, 1.0),
        Err(CapabilityError::BadAlpha(1.0))
    );
}

// ---------------------------------------------------------------------------------------
// Fraction of units inside every limit (Genz 1992)
// ---------------------------------------------------------------------------------------

fn bounds(v: &Value, missing: f64) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|t| t.as_f64().unwrap_or(missing))
        .collect()
}

/// Our rule against scipy.stats.multivariate_normal.cdf(upper, mean, cov,
/// lower_limit=lower) (abseps 1e-7; its spread over two scipy seeds is recorded too), for
/// the fixture cases whose dimension `p` satisfies `keep`; fixture written by
/// tests/fixtures/make_equivalence_fixtures.py. Held to 1e-4 absolute and to our own
/// printed error estimate plus scipy's.
fn fraction_inside_against_scipy(keep: impl Fn(usize) -> bool, settings: QmcSettings) {
    let fx = fixtures();
    let mut seen = 0;
    for (i, c) in fx["mvn"].as_array().unwrap().iter().enumerate() {
        let mean = DVector::from_vec(bounds(&c["mean"], f64::NAN));
        if !keep(mean.len()) {
            continue;
        }
        seen += 1;
        let cov = {
            let rows = c["cov"].as_array().unwrap();
            DMatrix::from_fn(rows.len(), rows.len(), |r, s| num(&rows[r][s]))
        };
        let lower = bounds(&c["lower"], f64::NEG_INFINITY);
        let upper = bounds(&c["upper"], f64::INFINITY);
        let r = fraction_inside(&mean, &cov, &lower, &upper, settings).unwrap();
        let want = num(&c["value"]);
        let err = (r.probability - want).abs();
        let allowed = r.error + num(&c["scipy_spread"]) + 1e-7;
        assert!(
            err <= 1e-4 && err <= allowed,
            "mvn case {i} (p {}): got {} ± {}, want {want}",
            mean.len(),
            r.probability,
            r.error
        );
    }
    assert!(seen > 0);
}

#[test]
fn fraction_inside_matches_scipy_up_to_12_characteristics() {
    // Ten shifts of 2000 lattice points (the default has twenty, for a steadier error
    // estimate; ten keep this test quick in a debug build).
    fraction_inside_against_scipy(
        |p| p <= 12,
        QmcSettings {
            shifts: 10,
            ..QmcSettings::default()
        },
    );
}

#[test]
fn fraction_inside_matches_scipy_for_20_and_30_characteristics() {
    // Four times the default points per shift: the randomized Kronecker rule needs them
    // for 1e-4 at these dimensions.
    fraction_inside_against_scipy(
        |p| p > 12,
        QmcSettings {
            shifts: 10,
            points: 8000,
            ..QmcSettings::default()
        },
    );
}

#[test]
fn fraction_inside_exact_cases() {
    // One characteristic, and independent ones: the product of normal probabilities
    // (checked with an erfc written here, independent of the crate: Φ(z) = erfc(−z/√2)/2).
    let phi = |z: f64| 0.5 * erfc_ref(-z / std::f64::consts::SQRT_2);
    let mean = DVector::from_column_slice(&[1.0, -2.0, 0.5]);
    let cov = DMatrix::from_diagonal(&DVector::from_column_slice(&[4.0, 0.25, 9.0]));
    let lower = [-1.0, f64::NEG_INFINITY, -4.0];
    let upper = [2.0, -1.5, f64::INFINITY];
    let r = fraction_inside(&mean, &cov, &lower, &upper, QmcSettings::default()).unwrap();
    let want = (phi(0.5) - phi(-1.0)) * phi(1.0) * (1.0 - phi(-1.5));
    close(r.probability, want, 1e-13, "independent");
    assert_eq!(r.error, 0.0);
    // Same seed, same answer; a singular covariance is refused.
    let corr = DMatrix::from_row_slice(2, 2, &[1.0, 0.7, 0.7, 1.0]);
    let m2 = DVector::zeros(2);
    let s = QmcSettings::default();
    let a = fraction_inside(&m2, &corr, &[-1.0, -1.0], &[1.0, 2.0], s).unwrap();
    let b = fraction_inside(&m2, &corr, &[-1.0, -1.0], &[1.0, 2.0], s).unwrap();
    assert_eq!(a, b);
    let sing = DMatrix::from_row_slice(2, 2, &[1.0, 1.0, 1.0, 1.0]);
    assert!(matches!(
        fraction_inside(&m2, &sing, &[-1.0, -1.0], &[1.0, 1.0], s),
        Err(CapabilityError::NotPositiveDefinite(_))
    ));
}

fn erfc_ref(x: f64) -> f64 {
    // Complementary error function by its continued fraction for x > 0 and the series of
    // erf for small |x| (Abramowitz & Stegun 7.1.5 and 7.1.14), independent of the crate.
    if x < 0.0 {
        return 2.0 - erfc_ref(-x);
    }
    if x < 2.0 {
        let mut term = x;
        let mut sum = x;
        let mut k = 0.0;
        while term.abs() > 1e-17 * sum.abs() {
            k += 1.0;
            term *= -x * x / k;
            sum += term / (2.0 * k + 1.0);
        }
        return 1.0 - 2.0 / std::f64::consts::PI.sqrt() * sum;
    }
    // Lentz on erfc(x) = exp(−x²)/√π · 1/(x + (1/2)/(x + 1/(x + (3/2)/(x + ...)))).
    let mut f = x;
    let (mut c, mut d) = (x, 0.0);
    for k in 1..200 {
        let a = k as f64 / 2.0;
        d = 1.0 / (x + a * d);
        c = x + a / c;
        let delta = c * d;
        f *= delta;
        if (delta - 1.0).abs() < 1e-16 {
            break;
        }
    }
    (-x * x).exp() / std::f64::consts::PI.sqrt() / f
}
