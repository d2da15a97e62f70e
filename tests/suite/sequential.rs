//! Sequential permutation p-values: Besag & Clifford's (1991) stop at the h-th hit and
//! Gandy's (2009) boundaries, checked against full runs of the same seed (the draws are
//! numbered, so a full run's sequence of hits, each refitted with the full T², shows where
//! each rule must stop), in a simulation of Gandy's resampling risk on a Bernoulli stream, on
//! unshifted pairs (Besag–Clifford stops after about h/p draws), and for old settings.

use crate::common;
use common::{names, sample};

use lotshift::analysis::{self, LotData, Settings, Silent};
use lotshift::data::{self, LoadOptions};
use lotshift::pipeline::{self, Request};
use lotshift::report::Record;
use lotshift::stats::permutation::{
    Boundaries, SPENDING_K, Sequencer, Sequential, SplitMix64, StoppedBy, permutation_hits_refit,
    permutation_test_data, permutation_test_data_sequential,
};
use nalgebra::DMatrix;

struct Rng(SplitMix64);

impl Rng {
    fn uniform(&mut self) -> f64 {
        ((self.0.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
    fn lot(&mut self, n: usize, p: usize, mean: f64) -> DMatrix<f64> {
        DMatrix::from_fn(n, p, |_, _| mean + self.normal())
    }
}

const ALPHA: f64 = 0.05;

/// Gandy's spending sequence ε_n = ε·n/(n + k) (the paper's suggestion, k = 1000).
fn spend(risk: f64, n: usize) -> f64 {
    risk * n as f64 / (n as f64 + SPENDING_K)
}

/// Where Besag & Clifford's rule stops on a sequence of hits: at the h-th hit within the
/// first B − 1 draws, p = h/l; otherwise after B − 1 draws, p = (g + 1)/B.
fn besag_clifford(hits: &[bool], h: usize, b: usize) -> (usize, f64) {
    let mut g = 0;
    for (i, &hit) in hits.iter().take(b - 1).enumerate() {
        g += usize::from(hit);
        if g == h {
            return (i + 1, h as f64 / (i + 1) as f64);
        }
    }
    (b - 1, (g + 1) as f64 / b as f64)
}

#[test]
fn sequential_runs_agree_with_full_runs_of_the_same_seed() {
    let b = 999;
    let bc_only = Sequential {
        hits: 10,
        risk: 0.0,
    };
    let both = Sequential::default();
    let mut rng = Rng(SplitMix64(31));
    // Three shifted pairs (2 SD in each characteristic) and four unshifted ones.
    for (case, shift) in [2.0, 2.0, 2.0, 0.0, 0.0, 0.0, 0.0].into_iter().enumerate() {
        let x = rng.lot(12, 2, 0.0);
        let y = rng.lot(15, 2, shift);
        let seed = 100 + case as u64;
        let hits = permutation_hits_refit(&x, &y, b, seed).unwrap();
        let full = permutation_test_data(&x, &y, b, seed).unwrap();
        let g_full = hits.iter().filter(|&&h| h).count();
        assert_eq!(full.at_least_observed, g_full, "case {case}");
        assert_eq!(full.stopped_by, StoppedBy::All);

        // Besag & Clifford alone: the published h/l (or (g + 1)/B) on the full run's draws.
        let seq = permutation_test_data_sequential(&x, &y, b, seed, Some(&bc_only), ALPHA).unwrap();
        let (l, p) = besag_clifford(&hits, 10, b);
        assert_eq!(seq.drawn, l, "case {case}");
        assert_eq!(seq.p_value, p, "case {case}");

        // Both rules: the same decision at alpha as the full run.
        let seq = permutation_test_data_sequential(&x, &y, b, seed, Some(&both), ALPHA).unwrap();
        assert_eq!(
            seq.p_value < ALPHA,
            full.p_value < ALPHA,
            "case {case}: full p {}, sequential {seq:?}",
            full.p_value
        );
        assert!(
            seq.drawn <= l,
            "case {case}: no later than Besag & Clifford alone"
        );
        let g = hits[..seq.drawn].iter().filter(|&&h| h).count();
        assert_eq!(seq.at_least_observed, g, "case {case}");
        match seq.stopped_by {
            StoppedBy::Hits => assert_eq!((seq.drawn, seq.p_value), (l, p), "case {case}"),
            StoppedBy::LowerBoundary if g == 0 => {
                // No hit so far: the only path is S_n = 0, of probability (1 − α)^n under
                // p = α, so the lower boundary first admits it at the smallest n with
                // (1 − α)^n ≤ ε_n; the Clopper–Pearson upper end for 0 of n is 1 − ε^(1/n).
                let n = (1..)
                    .find(|&n| (1.0 - ALPHA).powi(n) <= spend(both.risk, n as usize))
                    .unwrap() as usize;
                assert_eq!(seq.drawn, n, "case {case}");
                let [lo, hi] = seq.p_interval.unwrap();
                assert_eq!(lo, 0.0);
                assert!((hi - (1.0 - both.risk.powf(1.0 / n as f64))).abs() < 1e-10);
                assert!(hi < ALPHA);
            }
            StoppedBy::LowerBoundary => assert!(seq.p_interval.is_some(), "case {case}"),
            StoppedBy::UpperBoundary => panic!("case {case}: Besag & Clifford's rule was on"),
            StoppedBy::Limit => assert_eq!(seq.drawn, b - 1),
            StoppedBy::All => panic!("case {case}: sequential stopping was on"),
        }
        if shift > 0.0 {
            assert_eq!(seq.stopped_by, StoppedBy::LowerBoundary, "case {case}");
            assert!(seq.drawn < 300, "case {case}: {} draws", seq.drawn);
        } else if full.p_value > 0.1 {
            // A large p-value: Besag & Clifford's point, after h/p̂ draws give or take.
            assert_eq!(seq.stopped_by, StoppedBy::Hits, "case {case}");
        }
    }
}

/// Runs the stopping rules on a Bernoulli(p) stream `runs` times (at most 2,000 draws each)
/// and counts the stops by each rule.
fn simulate(rule: &Sequential, p: f64, runs: usize, seed: u64) -> [usize; 3] {
    let mut rules = Sequencer::new(2_001, Some(rule), ALPHA);
    rules.precompute(2_000);
    let mut rng = SplitMix64(seed);
    let threshold = (p * 2f64.powi(64)) as u64;
    let mut counts = [0; 3];
    for _ in 0..runs {
        rules.restart();
        while !rules.push(rng.next_u64() < threshold) {}
        match rules.stopped() {
            Some(StoppedBy::LowerBoundary) => counts[0] += 1,
            Some(StoppedBy::UpperBoundary) => counts[1] += 1,
            _ => counts[2] += 1,
        }
    }
    counts
}

#[test]
fn gandys_resampling_risk_holds_in_simulation() {
    // Each draw hits with a known probability p (a Bernoulli stream in place of T²s), the
    // stopping rules for alpha 0.05 and ε = 0.001 run until they stop or 2,000 draws. The
    // wrong decision of a boundary is "above alpha" for p ≤ alpha and "below alpha" for p >
    // alpha; its chance is at most ε by the paper's theorem. With N runs the count of wrong
    // decisions is then at most Binomial(N, ε); the check allows its mean plus 4 SD (a false
    // alarm of under 1e-4 when the bound holds).
    let runs = 20_000;
    let gandy = Sequential {
        hits: 0,
        risk: 1e-3,
    };
    let allowed = {
        let mean = runs as f64 * gandy.risk;
        (mean + 4.0 * mean.sqrt()).floor() as usize
    };
    for (k, p) in [ALPHA, 0.04, 0.06].into_iter().enumerate() {
        let [lower, upper, _] = simulate(&gandy, p, runs, 900 + k as u64);
        let wrong = if p <= ALPHA { upper } else { lower };
        assert!(
            wrong <= allowed,
            "p {p}: {wrong} wrong decisions of {runs} (allowed {allowed})"
        );
        if p == ALPHA {
            // At p = alpha both boundaries spend at most ε.
            assert!(lower <= allowed, "p = alpha: {lower} lower stops");
        }
    }
    // The simulated share of upper stops at p = alpha against the probability the recursion
    // spent there by 2,000 draws: the same quantity two ways (within 4 SD of a binomial count).
    let mut bounds = Boundaries::new(ALPHA, gandy.risk);
    for _ in 0..2_000 {
        bounds.step();
    }
    let [_, upper, _] = simulate(&gandy, ALPHA, runs, 950);
    let want = runs as f64 * bounds.spent()[0];
    assert!(
        (upper as f64 - want).abs() <= 4.0 * want.sqrt() + 1.0,
        "simulated {upper}, spent {want}"
    );
    // The default rules (Besag & Clifford's h = 10 beside the boundaries): a "below alpha"
    // decision by the lower boundary is still wrong for p above alpha at most ε of the time.
    for (k, p) in [0.055, 0.07].into_iter().enumerate() {
        let [lower, upper, _] = simulate(&Sequential::default(), p, runs, 960 + k as u64);
        assert_eq!(
            upper, 0,
            "the upper boundary does not stop beside Besag & Clifford"
        );
        assert!(lower <= allowed, "p {p}: {lower} wrong lower stops");
    }
}

#[test]
fn besag_clifford_stops_after_about_h_over_p_draws_on_unshifted_pairs() {
    // Drawing until the h-th hit takes a negative-binomial number of draws with mean h/p, so
    // l·p/h has mean 1 and SD √(1 − p)/√h (≈ 0.3 for h = 10); over 40 pairs the mean of it
    // lies within ±0.2 of 1 (more than 4 SD). p is estimated by a full run of 9,999
    // relabellings of the same seed.
    let mut rng = Rng(SplitMix64(41));
    let rule = Sequential {
        hits: 10,
        risk: 0.0,
    };
    let mut ratios = Vec::new();
    let mut seed = 0;
    while ratios.len() < 40 {
        seed += 1;
        let x = rng.lot(10, 2, 0.0);
        let y = rng.lot(11, 2, 0.0);
        let full = permutation_test_data(&x, &y, 9_999, seed).unwrap();
        if full.p_value < 0.02 {
            continue;
        }
        let seq =
            permutation_test_data_sequential(&x, &y, 9_999, seed, Some(&rule), ALPHA).unwrap();
        assert_eq!(seq.stopped_by, StoppedBy::Hits);
        assert_eq!(seq.p_value, 10.0 / seq.drawn as f64);
        ratios.push(seq.drawn as f64 * full.p_value / 10.0);
    }
    let mean = ratios.iter().sum::<f64>() / ratios.len() as f64;
    assert!((mean - 1.0).abs() < 0.2, "mean of l·p/h {mean}");
}

#[test]
fn old_settings_without_the_new_fields_read_as_all_relabellings_drawn() {
    let old = r#"{"alpha": 0.05, "leave_one_out": true, "checks": true,
                  "permutations": 9999, "seed": 20261202}"#;
    let s: Settings = serde_json::from_str(old).unwrap();
    assert_eq!(s.sequential, None);
    let r: lotshift::report::sections::SettingsRecord = serde_json::from_str(old).unwrap();
    assert_eq!(r.sequential, None);
    assert_eq!(Settings::from(&r).sequential, None);
    // A new run stops early by default.
    assert_eq!(Settings::default().sequential, Some(Sequential::default()));
    let back: Settings =
        serde_json::from_str(&serde_json::to_string(&Settings::default()).unwrap()).unwrap();
    assert_eq!(back, Settings::default());
}

#[test]
fn a_record_made_before_sequential_stopping_recomputes_as_it_was_made() {
    // An old record: all relabellings drawn, without the keys sequential stopping added.
    // Read back, its settings draw all of them again, and every recorded number recomputes
    // (what `lotshift verify` checks).
    let files = [
        sample("reference-route-a.csv"),
        sample("candidate-route-b.csv"),
    ];
    let run = |settings: Settings| {
        let mut lots = data::load_two(&files, None, None, &LoadOptions::default()).unwrap();
        let request = Request {
            settings,
            ..Request::default()
        };
        let (prepared, c) = pipeline::run_owned(&mut lots, &request, &Silent).unwrap();
        serde_json::to_value(Record::new(&c, Some((&prepared, [&lots[0], &lots[1]])))).unwrap()
    };
    let mut old = run(Settings {
        permutations: 299,
        sequential: None,
        ..Settings::default()
    });
    old["settings"]
        .as_object_mut()
        .unwrap()
        .remove("sequential");
    let perm = old["permutation"].as_object_mut().unwrap();
    for key in ["drawn", "stopped_by", "p_interval", "why"] {
        assert!(perm.remove(key).is_some(), "{key}");
    }
    let typed: Record = serde_json::from_value(old.clone()).unwrap();
    let settings = Settings::from(&typed.settings);
    assert_eq!(settings.sequential, None);
    let again = run(settings);
    assert_eq!(lotshift::report::sign::first_difference(&old, &again), None);
    assert_eq!(again["permutation"]["stopped_by"], "all_drawn");
    assert_eq!(again["permutation"]["drawn"], 299);
}

#[test]
fn a_shifted_pair_is_decided_early_and_the_text_says_why() {
    let mut rng = Rng(SplitMix64(77));
    let x = rng.lot(40, 3, 0.0);
    let y = rng.lot(40, 3, 1.5);
    let c = analysis::compare(
        &names(3),
        &[None, None, None],
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
        &Settings::default(),
        &Silent,
    )
    .unwrap();
    let p = c.permutation.as_ref().unwrap();
    assert_eq!(p.stopped_by, StoppedBy::LowerBoundary);
    assert!(p.drawn < 300 && p.permutations == analysis::DEFAULT_PERMUTATIONS);
    let [lo, hi] = p.p_interval.unwrap();
    assert!(lo <= hi && hi < ALPHA && p.p_value == hi);
    let line = lotshift::report::permutation_line(p);
    assert!(
        line.contains(&format!("Stopped after {} of at most 9999", p.drawn)),
        "{line}"
    );
    assert!(line.contains("lower boundary"), "{line}");
}
