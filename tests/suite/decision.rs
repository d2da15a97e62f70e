//! Specification limits, equivalence margins and capability, end to end: the sample pair
//! against the invented hub specification checked against statsmodels/scipy, the four-way
//! outcome on constructed lots, symmetry and invariance properties, big lots, and the command
//! line (messages for bad specification files, verify with a specification).

use crate::common;
use common::{names, reference_fixtures, sample};

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use lotshift::analysis::decision::{MarginRule, Outcome, Specification};
use lotshift::analysis::{self, Comparison, LotData, Settings, Silent, SummaryLot};
use lotshift::data::{self, LoadOptions};
use lotshift::pipeline::{self, Request, SpecRequest};
use nalgebra::DMatrix;

fn close(got: f64, want: f64, rel: f64, what: &str) {
    let tol = rel * want.abs().max(f64::MIN_POSITIVE);
    assert!(
        (got - want).abs() <= tol,
        "{what}: got {got:e}, want {want:e} (rel {:e})",
        ((got - want) / want).abs()
    );
}

fn f(v: &serde_json::Value) -> f64 {
    v.as_f64().expect("number")
}

fn quick() -> Settings {
    Settings {
        permutations: 0,
        leave_one_out: false,
        checks: false,
        ..Settings::default()
    }
}

fn sample_with_spec() -> Comparison {
    let mut lots = data::load_two(
        &[
            sample("reference-route-a.csv"),
            sample("candidate-route-b.csv"),
        ],
        None,
        None,
        &LoadOptions::default(),
    )
    .unwrap();
    let spec = data::spec::load_spec(&sample("hub-spec.csv"), &LoadOptions::default()).unwrap();
    let request = Request {
        settings: quick(),
        spec: SpecRequest {
            file: Some(spec),
            ..SpecRequest::default()
        },
        ..Request::default()
    };
    pipeline::run_owned(&mut lots, &request, &Silent).unwrap().1
}

/// Every number of the sample pair against sample-lots/hub-spec.csv, against values computed
/// from the same files by statsmodels (ttost_ind, tconfint_diff) and scipy (ncf, chi2, norm,
/// multivariate_normal): section `sample_spec` of tests/fixtures/reference.json, written by
/// tests/fixtures/make_fixtures.py.
#[test]
fn sample_pair_against_the_hub_specification_matches_statsmodels_and_scipy() {
    let fx = reference_fixtures();
    let want = &fx["sample_spec"];
    let c = sample_with_spec();
    let d = c.decision.as_ref().expect("a decision");
    let eq = d.equivalence.as_ref().expect("equivalence");
    assert_eq!(eq.per_characteristic.len(), 5);
    for (row, w) in eq
        .per_characteristic
        .iter()
        .zip(want["tost"].as_array().unwrap())
    {
        let name = &row.characteristic;
        // numpy subtracts two means of about 12 to 142: its own cancellation error is near 1e-11.
        close(row.difference, f(&w["difference"]), 1e-10, name);
        close(row.welch_p, f(&w["welch_p"]), 1e-9, name);
        close(row.pooled_p, f(&w["pooled_p"]), 1e-9, name);
        close(row.interval[0], f(&w["interval"][0]), 1e-9, name);
        close(row.interval[1], f(&w["interval"][1]), 1e-9, name);
        assert!(row.equivalent, "{name}");
    }
    assert_eq!(eq.all_equivalent, Some(true));
    let m = eq.multivariate.as_ref().expect("multivariate");
    let wm = &want["multivariate"];
    assert!(m.epsilon_from_margins);
    close(m.epsilon, f(&wm["epsilon"]), 1e-12, "epsilon");
    close(m.d2, f(&wm["d2"]), 1e-12, "d2");
    close(m.f, f(&wm["f"]), 1e-12, "F");
    close(m.noncentrality, f(&wm["noncentrality"]), 1e-12, "lambda");
    close(m.p_value, f(&wm["p_value"]), 1e-9, "Wellek p");
    close(m.critical_f, f(&wm["critical_f"]), 1e-9, "critical F");
    close(
        m.distance_upper_bound,
        f(&wm["distance_upper_bound"]),
        1e-9,
        "distance bound",
    );
    assert!(m.equivalent);
    // Capability (formulas of Chou, Owen & Borrego 1990 and Bissell 1990 evaluated by scipy).
    for (row, w) in d
        .capability
        .iter()
        .zip(want["capability"].as_array().unwrap())
    {
        for (g, (l, wl)) in row
            .lots
            .iter()
            .zip(w["lots"].as_array().unwrap())
            .enumerate()
        {
            let what = format!("{} lot {}", row.characteristic, g + 1);
            assert_eq!(l.index, "Cpk");
            close(l.cp.unwrap(), f(&wl["cp"]), 1e-12, &what);
            close(l.cpk, f(&wl["cpk"]), 1e-12, &what);
            for i in 0..2 {
                close(
                    l.cp_interval.unwrap()[i],
                    f(&wl["cp_interval"][i]),
                    1e-9,
                    &what,
                );
                close(l.cpk_interval[i], f(&wl["cpk_interval"][i]), 1e-12, &what);
            }
            close(l.ppm_expected, f(&wl["ppm_expected"]), 1e-9, &what);
            assert_eq!(
                l.out_of_spec,
                wl["out_of_spec"].as_u64().map(|v| v as usize)
            );
        }
    }
    // Fraction inside every limit: scipy's multivariate_normal.cdf (Genz's algorithm with
    // its own error near 1e-5) against ours, to 1e-4 absolute.
    let ins = d.in_spec.as_ref().expect("in_spec");
    for (l, w) in ins.lots.iter().zip(want["in_spec"].as_array().unwrap()) {
        assert!((l.expected - f(&w["expected"])).abs() < 1e-4, "{l:?} {w}");
        assert!(l.error < 1e-4, "{l:?}");
        assert_eq!(l.observed, Some(f(&w["observed"])));
    }
    assert_eq!(d.outcome, Some(Outcome::DifferWithinMargins));
    assert!(
        c.verdict
            .starts_with("The lots differ, but within the margins.")
    );
}

/// Two lots as summary statistics with a diagonal covariance, means `shift` SDs apart on
/// every characteristic.
fn summary_pair(p: usize, n: usize, shift: f64) -> Comparison {
    let lot = |name: &str, mean: f64| SummaryLot {
        name: name.into(),
        n,
        mean: vec![mean; p],
        covariance: (0..p)
            .map(|i| (0..p).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
            .collect(),
    };
    analysis::compare_summaries(
        &names(p),
        &vec![None; p],
        [&lot("ref", 10.0), &lot("cand", 10.0 + shift)],
        &quick(),
    )
    .unwrap()
}

fn with_rule(mut c: Comparison, rule: MarginRule) -> Comparison {
    let mut s = Specification::empty(&c.characteristics);
    s.rule = rule;
    analysis::apply_specification(&mut c, &s, None).unwrap();
    c
}

/// The four outcomes, each from lots built to land in it (a mathematical property of the
/// definitions: significance of T² against equivalence within margins).
#[test]
fn each_of_the_four_outcomes_is_reached() {
    let outcome = |c: &Comparison| c.decision.as_ref().unwrap().outcome;
    // Large lots, a tiny shift, margins of 0.5 SD: differ, but within the margins.
    let c = with_rule(summary_pair(3, 100_000, 0.02), MarginRule::ReferenceSd(0.5));
    assert_eq!(outcome(&c), Some(Outcome::DifferWithinMargins));
    // No shift at all, large lots: equivalent, no difference detected.
    let c = with_rule(summary_pair(3, 5_000, 0.0), MarginRule::ReferenceSd(0.2));
    assert_eq!(outcome(&c), Some(Outcome::Equivalent));
    // A shift of one SD against margins of 0.3 SD: differ, beyond the margins, and every
    // interval lies wholly outside its margin.
    let c = with_rule(summary_pair(3, 200, 1.0), MarginRule::ReferenceSd(0.3));
    assert_eq!(outcome(&c), Some(Outcome::DifferBeyondMargins));
    let eq = c.decision.as_ref().unwrap().equivalence.as_ref().unwrap();
    assert!(
        eq.per_characteristic
            .iter()
            .all(|r| r.beyond && !r.equivalent)
    );
    // Small lots and no shift: neither shown; the plan gives the lots the tests would need.
    let c = with_rule(summary_pair(2, 8, 0.0), MarginRule::ReferenceSd(0.5));
    assert_eq!(outcome(&c), Some(Outcome::Inconclusive));
    let need = c
        .decision
        .as_ref()
        .unwrap()
        .units_needed
        .expect("a lot size");
    assert!(need > 8, "{need}");
    assert!(c.verdict.contains(&format!("About {need} units per lot")));
    // At that size the same lots (still no shift) come out equivalent with power 0.8 at
    // least in expectation; here the observed difference is exactly zero, so they do.
    let c = with_rule(summary_pair(2, need, 0.0), MarginRule::ReferenceSd(0.5));
    assert_eq!(outcome(&c), Some(Outcome::Equivalent));
    // Without margins there is no outcome, and the verdict is the T² verdict alone.
    let plain = summary_pair(3, 200, 1.0);
    assert!(plain.decision.is_none());
    assert!(plain.verdict.starts_with("The lots differ at alpha"));
}

fn simulated(p: usize, n: usize, shift_sd: f64, seed: u64) -> [DMatrix<f64>; 2] {
    // SplitMix64 and Box–Muller: independent standard normal characteristics.
    let mut state = seed;
    let mut next = move || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut normal = move || {
        let u = 1.0 - next();
        let v = next();
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    };
    let a = DMatrix::from_fn(n, p, |_, k| 50.0 + k as f64 + normal());
    let b = DMatrix::from_fn(n, p, |_, k| 50.0 + k as f64 + shift_sd + normal());
    [a, b]
}

/// The case of the issue: 200,000 units × 30 characteristics per lot, means 1% of an SD
/// apart. The T² test calls the lots different; with margins of 0.1 SD the outcome is
/// "differ, but within the margins".
#[test]
fn big_lots_with_a_tiny_shift_differ_but_within_the_margins() {
    let (p, n) = (30, 200_000);
    let [a, b] = simulated(p, n, 0.01, 7);
    let mut c = analysis::compare(
        &names(p),
        &vec![None; p],
        [
            LotData {
                name: "reference",
                data: &a,
            },
            LotData {
                name: "candidate",
                data: &b,
            },
        ],
        &quick(),
        &Silent,
    )
    .unwrap();
    assert!(c.hotelling.differ, "p = {}", c.hotelling.p_value);
    let mut s = Specification::empty(&c.characteristics);
    s.rule = MarginRule::ReferenceSd(0.1);
    let observed = analysis::decision::observe(&s, [&a, &b]);
    analysis::apply_specification(&mut c, &s, Some(&observed)).unwrap();
    let d = c.decision.as_ref().unwrap();
    assert_eq!(d.outcome, Some(Outcome::DifferWithinMargins));
    assert!(
        c.verdict
            .starts_with("The lots differ, but within the margins.")
    );
}

/// Swapping the lots mirrors every equivalence result: differences change sign, p-values
/// and the outcome stay (symmetric margins; a property of both tests).
#[test]
fn swapping_the_lots_mirrors_the_equivalence_results() {
    let [a, b] = simulated(4, 60, 0.2, 11);
    let run = |x: &DMatrix<f64>, y: &DMatrix<f64>| {
        let mut c = analysis::compare(
            &names(4),
            &[None, None, None, None],
            [
                LotData { name: "x", data: x },
                LotData { name: "y", data: y },
            ],
            &quick(),
            &Silent,
        )
        .unwrap();
        let mut s = Specification::empty(&c.characteristics);
        s.distance_margin = Some(1.0);
        for e in &mut s.characteristics {
            e.margin = Some([-0.6, 0.6]);
            e.margin_from = Some(analysis::decision::MarginFrom::File);
        }
        analysis::apply_specification(&mut c, &s, None).unwrap();
        c.decision.unwrap()
    };
    let (d1, d2) = (run(&a, &b), run(&b, &a));
    let (e1, e2) = (d1.equivalence.unwrap(), d2.equivalence.unwrap());
    for (r1, r2) in e1.per_characteristic.iter().zip(&e2.per_characteristic) {
        close(r2.difference, -r1.difference, 1e-9, "difference");
        close(r2.welch_p, r1.welch_p, 1e-9, "Welch p");
        close(r2.pooled_p, r1.pooled_p, 1e-9, "pooled p");
        close(r2.interval[0], -r1.interval[1], 1e-9, "interval");
    }
    let (m1, m2) = (e1.multivariate.unwrap(), e2.multivariate.unwrap());
    assert!(!m1.epsilon_from_margins);
    close(m2.p_value, m1.p_value, 1e-9, "Wellek p");
    close(
        m2.distance_upper_bound,
        m1.distance_upper_bound,
        1e-9,
        "bound",
    );
    assert_eq!(d1.outcome, d2.outcome);
}

/// Changing a characteristic's unit and origin (x → 1000 x + 7) changes no equivalence
/// p-value when the margin follows the reference SD (affine invariance of both tests).
#[test]
fn a_change_of_unit_changes_no_p_value() {
    let [a, b] = simulated(3, 80, 0.1, 5);
    let rescale = |m: &DMatrix<f64>| {
        let mut m = m.clone();
        for v in m.column_mut(1).iter_mut() {
            *v = 1000.0 * *v + 7.0;
        }
        m
    };
    let run = |x: &DMatrix<f64>, y: &DMatrix<f64>| {
        let c = analysis::compare(
            &names(3),
            &[None, None, None],
            [
                LotData { name: "x", data: x },
                LotData { name: "y", data: y },
            ],
            &quick(),
            &Silent,
        )
        .unwrap();
        with_rule(c, MarginRule::ReferenceSd(0.5))
            .decision
            .unwrap()
            .equivalence
            .unwrap()
    };
    let (e1, e2) = (run(&a, &b), run(&rescale(&a), &rescale(&b)));
    for (r1, r2) in e1.per_characteristic.iter().zip(&e2.per_characteristic) {
        close(r2.welch_p, r1.welch_p, 1e-9, "Welch p");
        close(r2.pooled_p, r1.pooled_p, 1e-9, "pooled p");
    }
    let (m1, m2) = (e1.multivariate.unwrap(), e2.multivariate.unwrap());
    close(m2.epsilon, m1.epsilon, 1e-9, "epsilon");
    close(m2.p_value, m1.p_value, 1e-9, "Wellek p");
}

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_lotshift"))
}

fn run(args: &[&str], dir: &Path) -> Output {
    bin()
        .args(args)
        .current_dir(dir)
        .output()
        .expect("binary runs")
}

fn tmpdir(tag: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("lotshift-dec-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for f in [
        "reference-route-a.csv",
        "candidate-route-b.csv",
        "hub-spec.csv",
    ] {
        std::fs::copy(sample(f), dir.join(f)).unwrap();
    }
    dir
}

/// A bad specification file stops `compare` with one line naming the file, row and column,
/// before any output is written.
#[test]
fn bad_specification_files_name_file_row_and_column() {
    let dir = tmpdir("bad");
    let cases = [
        (
            "characteristic,lower,upper\nhub length,28.1,27.9\n",
            ["spec.csv", "row 2", "upper", "not above the lower limit"],
        ),
        (
            "characteristic,margin\nhub length,-0.01\n",
            ["spec.csv", "row 2", "margin", "must be positive"],
        ),
        (
            "characteristic,margin\nhub lenght,0.01\n",
            [
                "spec.csv",
                "row 2",
                "\"hub lenght\"",
                "did you mean \"hub length\"",
            ],
        ),
        (
            "characteristic,unit,margin\nmass,kg,0.4\n",
            ["spec.csv", "row 2", "kg", "g in the lot files"],
        ),
        (
            "characteristic,lower,upper\nmass,140,abc\n",
            ["spec.csv", "row 2", "upper", "abc"],
        ),
    ];
    for (text, wants) in cases {
        std::fs::write(dir.join("spec.csv"), text).unwrap();
        let o = run(
            &[
                "compare",
                "reference-route-a.csv",
                "candidate-route-b.csv",
                "--spec",
                "spec.csv",
                "--json",
                "out.json",
            ],
            &dir,
        );
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{text}: {err}");
        assert_eq!(err.trim_end().lines().count(), 1, "{err}");
        for w in wants {
            assert!(err.contains(w), "{text}: want {w} in {err}");
        }
        assert!(o.stdout.is_empty());
        assert!(!dir.join("out.json").exists());
    }
    let o = run(
        &[
            "compare",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--margin-sd=0",
        ],
        &dir,
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--margin-sd"));
    std::fs::remove_dir_all(dir).unwrap();
}

/// The passphrase of the signing key [`signing_key`] makes (in `pass.txt`).
const PASSPHRASE: &str = "a long test passphrase";

/// A protected signing key in `dir/keys` for Ana Reyes, listed in `dir/trusted.json` as a
/// reviewer.
fn signing_key(dir: &std::path::Path) {
    std::fs::write(dir.join("pass.txt"), format!("{PASSPHRASE}\n")).unwrap();
    for args in [
        &[
            "keygen",
            "--signer",
            "Ana Reyes",
            "--out",
            "keys",
            "--passphrase-file",
            "pass.txt",
        ][..],
        &[
            "trust",
            "keys/lotshift-signing-key.pub.pem",
            "--name",
            "Ana Reyes",
            "--role",
            "reviewer",
            "--trusted",
            "trusted.json",
        ][..],
    ] {
        let o = run(args, dir);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
}

/// A signed summary made with a specification verifies from the record's specification and
/// from the file; another file or a re-signed record with a changed margin does not.
#[test]
fn verify_recomputes_from_the_recorded_specification() {
    let dir = tmpdir("verify");
    let ok = |o: &Output| {
        assert!(
            o.status.success(),
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        )
    };
    signing_key(&dir);
    ok(&run(
        &[
            "compare",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--spec",
            "hub-spec.csv",
            "--permutations",
            "99",
            "--sign",
            "keys/lotshift-signing-key.pem",
            "--passphrase-file",
            "pass.txt",
            "--meaning",
            "review",
            "--out",
            "summary.json",
            "--html",
            "report.html",
        ],
        &dir,
    ));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    for want in [
        "id=\"outcome\"><b>The lots differ, but within the margins.</b>",
        "id=\"margin-chart\"",
        "id=\"capability\"",
        "hub-spec.csv",
        "Inside every limit at once",
    ] {
        assert!(html.contains(want), "{want}");
    }
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    let rec = &doc["record"];
    assert_eq!(rec["outcome"], "differ_within_margins");
    assert_eq!(rec["specification"]["file"], "hub-spec.csv");
    assert_eq!(
        rec["specification"]["characteristics"]
            .as_array()
            .unwrap()
            .len(),
        5
    );
    assert!(rec["equivalence"]["multivariate"]["p_value"].is_number());
    let files = [
        "--files",
        "reference-route-a.csv",
        "candidate-route-b.csv",
        "--trusted",
        "trusted.json",
    ];
    let o = run(
        &[&["verify", "summary.json"][..], &files[..]].concat(),
        &dir,
    );
    ok(&o);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.trim_end().ends_with("VERIFIED"), "{out}");
    let o = run(
        &[
            &["verify", "summary.json"][..],
            &files[..],
            &["--spec", "hub-spec.csv"][..],
        ]
        .concat(),
        &dir,
    );
    ok(&o);
    assert!(String::from_utf8_lossy(&o.stdout).contains("spec file    hub-spec.csv matches"));
    // Another specification file: not the one used.
    let other = std::fs::read_to_string(dir.join("hub-spec.csv"))
        .unwrap()
        .replace("0.030", "0.040");
    std::fs::write(dir.join("other-spec.csv"), other).unwrap();
    let o = run(
        &[
            &["verify", "summary.json"][..],
            &files[..],
            &["--spec", "other-spec.csv"][..],
        ]
        .concat(),
        &dir,
    );
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stdout).contains("is not the file used"));
    // A margin changed in the record and signed again: the recomputed TOST differs.
    let mut forged = rec.clone();
    forged["specification"]["characteristics"][2]["margin"] = serde_json::json!([-0.05, 0.05]);
    let key = lotshift::report::sign::read_signing_key(
        &dir.join("keys/lotshift-signing-key.pem"),
        Some(PASSPHRASE),
    )
    .unwrap();
    let s = lotshift::report::sign::sign_value(
        forged,
        &key,
        "Ana Reyes",
        lotshift::report::sign::Meaning::Review,
        "2026-12-02T10:00:00Z",
    )
    .unwrap();
    std::fs::write(dir.join("forged.json"), s.to_json()).unwrap();
    let o = run(&[&["verify", "forged.json"][..], &files[..]].concat(), &dir);
    assert_eq!(o.status.code(), Some(1));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("a recomputed number differs"), "{out}");
    // A record without a specification, checked with --spec: refused.
    ok(&run(
        &[
            "compare",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--permutations",
            "0",
            "--sign",
            "keys/lotshift-signing-key.pem",
            "--passphrase-file",
            "pass.txt",
            "--meaning",
            "review",
            "--out",
            "plain.json",
        ],
        &dir,
    ));
    let o = run(
        &[
            &["verify", "plain.json"][..],
            &files[..],
            &["--spec", "hub-spec.csv"][..],
        ]
        .concat(),
        &dir,
    );
    assert_eq!(o.status.code(), Some(1));
    std::fs::remove_dir_all(dir).unwrap();
}

/// Without margins the text says what equivalence needs; with a rule only, the margins are
/// marked as coming from the rule.
#[test]
fn text_output_says_what_equivalence_needs() {
    let dir = tmpdir("text");
    let o = run(
        &[
            "compare",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--permutations",
            "0",
        ],
        &dir,
    );
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("Equivalence: not assessed"), "{out}");
    let o = run(
        &[
            "compare",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--permutations",
            "0",
            "--margin-sd",
            "1.5",
        ],
        &dir,
    );
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("(rule)"), "{out}");
    assert!(out.contains("margin 1.5 × the reference lot's SD"), "{out}");
    std::fs::remove_dir_all(dir).unwrap();
}

/// Summaries made with `--exclude`, with `--characteristics` in another order, and with a
/// misspelt column verify: `verify` replays the selection and each left-out column keeps its
/// recorded reason.
#[test]
fn verify_replays_exclusions_selections_and_columns_not_compared() {
    let dir = tmpdir("replay");
    let text = std::fs::read_to_string(dir.join("candidate-route-b.csv")).unwrap();
    let (head, body) = text.split_once('\n').unwrap();
    std::fs::write(
        dir.join("typo.csv"),
        format!("{}\n{body}", head.replace("mass", "mas")),
    )
    .unwrap();
    let ok = |o: &Output| {
        assert!(
            o.status.success(),
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        )
    };
    signing_key(&dir);
    for (i, (cand, extra)) in [
        (
            "candidate-route-b.csv",
            vec!["--exclude", "mass,bore diameter"],
        ),
        (
            "candidate-route-b.csv",
            vec!["--characteristics", "mass,hub length,flange thickness"],
        ),
        ("typo.csv", vec![]),
    ]
    .into_iter()
    .enumerate()
    {
        let out = format!("s{i}.json");
        let mut args = vec![
            "compare",
            "reference-route-a.csv",
            cand,
            "--permutations",
            "0",
            "--sign",
            "keys/lotshift-signing-key.pem",
            "--passphrase-file",
            "pass.txt",
            "--meaning",
            "review",
            "--out",
            &out,
        ];
        args.extend(extra.iter().copied());
        ok(&run(&args, &dir));
        let o = run(
            &[
                "verify",
                &out,
                "--files",
                "reference-route-a.csv",
                cand,
                "--trusted",
                "trusted.json",
            ],
            &dir,
        );
        ok(&o);
        assert!(
            String::from_utf8_lossy(&o.stdout)
                .trim_end()
                .ends_with("VERIFIED")
        );
    }
    std::fs::remove_dir_all(dir).unwrap();
}

/// Units set aside with a reason (by serial number or by row): the lot files stay untouched,
/// the comparison equals the one of the files without those rows, the exclusions are in the
/// record and the signature, and verify replays them. Bad exclusion files name file, row and
/// column.
#[test]
fn units_set_aside_with_a_reason_are_recorded_and_replayed() {
    let dir = tmpdir("aside");
    std::fs::write(
        dir.join("aside.csv"),
        "lot,serial,row,reason\ncandidate,HX40-B-0009,,dropped on the floor before measuring\nreference,,5,gauge out of calibration\n",
    )
    .unwrap();
    let ok = |o: &Output| {
        assert!(
            o.status.success(),
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        )
    };
    signing_key(&dir);
    let before = std::fs::read(dir.join("candidate-route-b.csv")).unwrap();
    let o = run(
        &[
            "compare",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--exclude-units",
            "aside.csv",
            "--permutations",
            "0",
            "--sign",
            "keys/lotshift-signing-key.pem",
            "--passphrase-file",
            "pass.txt",
            "--meaning",
            "review",
            "--out",
            "s.json",
            "--json",
            "r.json",
        ],
        &dir,
    );
    ok(&o);
    assert_eq!(
        std::fs::read(dir.join("candidate-route-b.csv")).unwrap(),
        before
    );
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("set aside from lot 2: row 10 (serial HX40-B-0009"),
        "{out}"
    );
    assert!(out.contains("dropped on the floor"), "{out}");
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("r.json")).unwrap()).unwrap();
    let ex = rec["exclusions"].as_array().unwrap();
    assert_eq!(ex.len(), 2);
    assert_eq!(ex[0]["row"], 10);
    assert_eq!(ex[1]["reason"], "gauge out of calibration");
    // The same T² as the files with those two rows deleted.
    let drop_row = |name: &str, row: usize, to: &str| {
        let text = std::fs::read_to_string(dir.join(name)).unwrap();
        let kept: Vec<&str> = text
            .lines()
            .enumerate()
            .filter(|(i, _)| i + 1 != row)
            .map(|(_, l)| l)
            .collect();
        std::fs::write(dir.join(to), kept.join("\n") + "\n").unwrap();
    };
    drop_row("reference-route-a.csv", 5, "ref-cut.csv");
    drop_row("candidate-route-b.csv", 10, "cand-cut.csv");
    let o = run(
        &[
            "compare",
            "ref-cut.csv",
            "cand-cut.csv",
            "--permutations",
            "0",
            "--json",
            "-",
        ],
        &dir,
    );
    let cut: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let (a, b) = (
        rec["hotelling"]["t2"].as_f64().unwrap(),
        cut["hotelling"]["t2"].as_f64().unwrap(),
    );
    assert!((a - b).abs() < 1e-12 * b, "{a} vs {b}");
    let o = run(
        &[
            "verify",
            "s.json",
            "--files",
            "reference-route-a.csv",
            "candidate-route-b.csv",
            "--trusted",
            "trusted.json",
        ],
        &dir,
    );
    ok(&o);
    for (text, wants) in [
        (
            "lot,serial,reason\ncandidate,HX40-B-9999,scratched\n",
            vec!["aside.csv", "row 2", "no unit of lot", "HX40-B-9999"],
        ),
        (
            "lot,serial,reason\ncandidate,HX40-B-0009,\n",
            vec!["aside.csv", "row 2", "reason", "needs its reason"],
        ),
        (
            "lot,serial,reason\nbatch 7,HX40-B-0009,scratched\n",
            vec!["aside.csv", "row 2", "not a lot"],
        ),
    ] {
        std::fs::write(dir.join("aside.csv"), text).unwrap();
        let o = run(
            &[
                "compare",
                "reference-route-a.csv",
                "candidate-route-b.csv",
                "--exclude-units",
                "aside.csv",
            ],
            &dir,
        );
        assert_eq!(o.status.code(), Some(2));
        let err = String::from_utf8_lossy(&o.stderr);
        for w in wants {
            assert!(err.contains(w), "{w} in {err}");
        }
    }
    std::fs::remove_dir_all(dir).unwrap();
}
