//! The built binary on the sample lots and on bad files: output, record and exit status.

use crate::common;
use common::sample;

use std::path::PathBuf;
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_lotshift"))
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().expect("binary runs")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn tmpdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("lotshift-cli-{tag}-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn compare_prints_the_verdict_and_writes_the_record() {
    let dir = tmpdir("record");
    let json = dir.join("record.json");
    let a = sample("reference-route-a.csv");
    let b = sample("candidate-route-b.csv");
    let o = run(&[
        "compare",
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        "--json",
        json.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains("The lots differ at alpha 0.05"), "{out}");
    assert!(out.contains("hub length"));
    assert!(out.contains("supports, and does not replace"));
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(rec["schema"], "lotshift.comparison/2");
    assert_eq!(rec["alpha"], 0.05);
    assert_eq!(rec["lots"][0]["n"], 39);
    assert_eq!(rec["lots"][0]["n_excluded"], 1);
    assert_eq!(rec["lots"][1]["file"], "candidate-route-b.csv");
    assert_eq!(rec["lots"][0]["sha256"].as_str().unwrap().len(), 64);
    for key in [
        "t2",
        "f",
        "df1",
        "df2",
        "p_value",
        "critical_t2",
        "critical_f",
        "mahalanobis_d2",
    ] {
        assert!(rec["hotelling"][key].is_number(), "hotelling.{key}");
    }
    assert_eq!(rec["intervals"].as_array().unwrap().len(), 5);
    assert!(rec["intervals"][0]["simultaneous"].is_array());
    assert!(rec["discriminant"]["standardized"].is_array());
    // Full precision: the record's T² is the engine's T², not a rounded print.
    let t2 = rec["hotelling"]["t2"].as_f64().unwrap();
    assert!(t2.to_string().len() > 10, "{t2}");
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn json_to_stdout_is_only_json() {
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("repeat-route-a.csv").to_str().unwrap(),
        "--json",
        "-",
    ]);
    assert!(o.status.success());
    let rec: serde_json::Value =
        serde_json::from_str(&stdout(&o)).expect("stdout is one JSON document");
    assert_eq!(rec["hotelling"]["differ"], false);
}

#[test]
fn fail_on_shift_sets_the_exit_status() {
    let a = sample("reference-route-a.csv");
    let o = run(&[
        "compare",
        a.to_str().unwrap(),
        sample("candidate-route-b.xlsx").to_str().unwrap(),
        "--fail-on-shift",
    ]);
    assert_eq!(o.status.code(), Some(1));
    let o = run(&[
        "compare",
        a.to_str().unwrap(),
        sample("repeat-route-a.csv").to_str().unwrap(),
        "--fail-on-shift",
    ]);
    assert_eq!(o.status.code(), Some(0));
}

#[test]
fn every_form_of_the_sample_gives_the_same_t2() {
    let get = |args: &[&str]| -> f64 {
        let mut all = vec!["compare"];
        all.extend_from_slice(args);
        all.extend_from_slice(&["--json", "-"]);
        let o = run(&all);
        assert!(o.status.success(), "{}", stderr(&o));
        let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
        v["hotelling"]["t2"].as_f64().unwrap()
    };
    let a = sample("reference-route-a.csv");
    let a = a.to_str().unwrap();
    let csv = get(&[a, sample("candidate-route-b.csv").to_str().unwrap()]);
    let xlsx = get(&[a, sample("candidate-route-b.xlsx").to_str().unwrap()]);
    let euro = get(&[
        a,
        sample("candidate-route-b-semicolon.csv").to_str().unwrap(),
    ]);
    let split = get(&[
        sample("both-routes.csv").to_str().unwrap(),
        "--lot-column",
        "route",
    ]);
    assert_eq!(csv, xlsx);
    assert_eq!(csv, euro);
    assert_eq!(csv, split);
}

#[test]
fn characteristics_and_exclusions() {
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
        "--characteristics",
        "Hub Length,flange thickness",
        "--json",
        "-",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert_eq!(
        v["characteristics"],
        serde_json::json!(["hub length", "flange thickness"])
    );
    assert_eq!(v["hotelling"]["df1"], 2.0);
    // With mass left out no unit is excluded for its missing cell.
    assert_eq!(v["lots"][0]["n"], 40);
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
        "--exclude",
        "mass",
        "--json",
        "-",
    ]);
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert_eq!(v["hotelling"]["df1"], 4.0);
    assert_eq!(v["unmatched"][0]["why"], "excluded");
}

#[test]
fn bad_input_exits_2_with_one_line_naming_the_place() {
    let dir = tmpdir("bad");
    let bad = dir.join("bad.csv");
    std::fs::write(&bad, "x,y\n1,2\n3,zz\n5,6\n").unwrap();
    let o = run(&[
        "compare",
        bad.to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("bad.csv, row 3, column B \"y\""), "{err}");
    assert!(err.contains("\"zz\""), "{err}");
    // A missing file.
    let o = run(&[
        "compare",
        "/nonexistent.csv",
        sample("candidate-route-b.csv").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("/nonexistent.csv"));
    // No column in common.
    let other = dir.join("other.csv");
    std::fs::write(&other, "a,b\n1,2\n3,4\n5,7\n").unwrap();
    let o = run(&["compare", bad.to_str().unwrap(), other.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    // A lot column with three values and none chosen.
    let three = dir.join("three.csv");
    std::fs::write(&three, "lot,x\nA,1\nB,2\nC,3\nA,4\nB,5\nC,6\n").unwrap();
    let o = run(&["compare", three.to_str().unwrap(), "--lot-column", "lot"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--lot-values"), "{}", stderr(&o));
    // A failed --json write leaves nothing behind.
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
        "--json",
        dir.join("no-such-dir/record.json").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(!dir.join("no-such-dir").exists());
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn compare_stats_from_summary_statistics() {
    // Johnson & Wichern, 6th ed., Example 6.3 (soap), as summary statistics (from memory).
    let dir = tmpdir("stats");
    let spec = dir.join("soap.json");
    std::fs::write(
        &spec,
        r#"{"characteristics": ["lather", "mildness"],
            "lots": [{"name": "method 1", "n": 50, "mean": [8.3, 4.1], "covariance": [[2, 1], [1, 6]]},
                     {"name": "method 2", "n": 50, "mean": [10.2, 3.9], "covariance": [[2, 1], [1, 4]]}]}"#,
    )
    .unwrap();
    let o = run(&["compare-stats", spec.to_str().unwrap(), "--json", "-"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert!((v["hotelling"]["t2"].as_f64().unwrap() - 52.47).abs() < 0.005);
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn compare_stats_on_the_bundled_certificate_matches_numpy() {
    // The invented supplier certificate (sample-lots/generate.py); T², F and p computed from
    // the same JSON with numpy/scipy by tests/fixtures/make_fixtures.py.
    let fx = common::reference_fixtures();
    let want = &fx["sample_lots"]["supplier_certificate"];
    let o = run(&[
        "compare-stats",
        sample("supplier-certificate.json").to_str().unwrap(),
        "--json",
        "-",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    for (key, got) in [("t2", "t2"), ("f", "f"), ("p_value", "p_value")] {
        let w = want[key].as_f64().unwrap();
        let g = v["hotelling"][got].as_f64().unwrap();
        assert!(((g - w) / w).abs() < 1e-10, "{key}: {g} against {w}");
    }
    assert_eq!(v["units"][2], "g");
}

#[test]
fn lot_values_take_one_comma_separated_list() {
    // The documented form --lot-values A,B; the help shows one value list.
    let o = run(&[
        "compare",
        sample("both-routes.csv").to_str().unwrap(),
        "--lot-column",
        "route",
        "--lot-values",
        "B,A",
        "--json",
        "-",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert_eq!(v["lots"][0]["split"][1], "B");
    assert_eq!(v["lots"][1]["split"][1], "A");
    let o = run(&["compare", "--help"]);
    let help = stdout(&o);
    assert!(
        help.contains("--lot-values <REFERENCE,CANDIDATE>"),
        "{help}"
    );
    assert!(!help.contains("<REFERENCE,CANDIDATE> <"), "{help}");
    assert!(help.contains("never an automatic release"), "{help}");
    // One value, three values, the same value twice: a usage error naming the form.
    for bad in ["B", "A,B,C", "A,A"] {
        let o = run(&[
            "compare",
            sample("both-routes.csv").to_str().unwrap(),
            "--lot-column",
            "route",
            "--lot-values",
            bad,
        ]);
        assert_eq!(o.status.code(), Some(2), "{bad}");
        assert!(stderr(&o).contains("--lot-values"), "{bad}: {}", stderr(&o));
    }
    // verify takes the lot files as --files.
    let o = run(&["verify", "--help"]);
    assert!(stdout(&o).contains("--files"), "{}", stdout(&o));
}

#[test]
fn inspect_shows_what_lotshift_sees() {
    let o = run(&[
        "inspect",
        sample("candidate-route-b-semicolon.csv").to_str().unwrap(),
    ]);
    assert!(o.status.success());
    let out = stdout(&o);
    assert!(out.contains("delimiter   semicolon"), "{out}");
    assert!(out.contains("decimal     comma"), "{out}");
    assert!(out.contains("hub length (mm)"));
    assert!(out.contains("characteristic"));
    assert!(out.contains("label"));
    let o = run(&[
        "inspect",
        sample("candidate-route-b.xlsx").to_str().unwrap(),
        "--sheet",
        "nope",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("\"hubs\""));
}

#[test]
fn help_lists_the_subcommands() {
    let o = run(&["--help"]);
    assert!(o.status.success());
    let out = stdout(&o);
    for s in ["compare", "compare-stats", "inspect", "--screenshot"] {
        assert!(out.contains(s), "{s}");
    }
}

#[test]
fn plan_gives_power_and_lot_size() {
    // Cohen (1988), Table 2.4.1 (from memory): d = 0.5, alpha 0.05, power 0.80 needs 64 per
    // group; with one characteristic T² is the squared t, so lotshift must say 64.
    let o = run(&[
        "plan",
        "--characteristics",
        "1",
        "--distance",
        "0.5",
        "--target-power",
        "0.8",
        "--units",
        "64",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains("units per lot for power 0.8   64"), "{out}");
    assert!(out.contains("power with 64 units per lot"), "{out}");
    // From summary statistics (J&W Example 6.3's soap lots, from memory): a large shift needs
    // few units.
    let dir = tmpdir("plan");
    let spec = dir.join("soap.json");
    std::fs::write(
        &spec,
        r#"{"characteristics": ["lather", "mildness"],
            "lots": [{"name": "1", "n": 50, "mean": [8.3, 4.1], "covariance": [[2, 1], [1, 6]]},
                     {"name": "2", "n": 50, "mean": [10.2, 3.9], "covariance": [[2, 1], [1, 4]]}]}"#,
    )
    .unwrap();
    let o = run(&["plan", "--from-summary", spec.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(
        stdout(&o).contains("Mahalanobis distance       1.449"),
        "{}",
        stdout(&o)
    );
    let o = run(&["plan", "--characteristics", "3"]);
    assert_eq!(o.status.code(), Some(2));
    std::fs::remove_dir_all(dir).unwrap();
}

/// The command lines README.md shows: every `$L …` line of its `sh` blocks (continuation
/// lines joined) and the `--screenshot` line.
fn readme_commands() -> (Vec<String>, Vec<String>) {
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).unwrap();
    let mut commands = Vec::new();
    let mut screenshots = Vec::new();
    let mut in_sh = false;
    let mut pending = String::new();
    for line in text.lines() {
        let t = line.trim_start();
        if t.starts_with("```") {
            in_sh = !in_sh && t.trim_start_matches('`').trim() == "sh";
            continue;
        }
        if !in_sh {
            continue;
        }
        if !pending.is_empty() {
            pending.push(' ');
            pending.push_str(t.trim_end_matches('\\').trim());
            if !t.ends_with('\\') {
                commands.push(std::mem::take(&mut pending));
            }
            continue;
        }
        if t.starts_with("$L ") {
            if t.ends_with('\\') {
                pending = t.trim_end_matches('\\').trim().to_string();
            } else {
                commands.push(t.to_string());
            }
        } else if t.contains("--screenshot") && !t.starts_with('#') {
            screenshots.push(t.to_string());
        }
    }
    (commands, screenshots)
}

#[test]
fn every_command_line_in_the_readme_runs() {
    // Runs each `$L …` line in README.md's order, as a shell would, in a temporary folder
    // holding a copy of the sample lots, with HOME there too (for the key the README makes).
    // A documented command that exits with status 2 (a usage error or bad input) or any other
    // failure fails this test; `--fail-on-shift` lines may exit 1.
    let (commands, screenshots) = readme_commands();
    assert!(commands.len() >= 10, "{commands:?}");
    assert!(
        !screenshots.is_empty(),
        "the README shows a --screenshot line"
    );
    let dir = tmpdir("readme");
    let lots = dir.join("sample-lots");
    std::fs::create_dir_all(&lots).unwrap();
    for e in std::fs::read_dir(sample(".")).unwrap() {
        let p = e.unwrap().path();
        if p.is_file() {
            std::fs::copy(&p, lots.join(p.file_name().unwrap())).unwrap();
        }
    }
    let home = dir.join("home");
    std::fs::create_dir_all(&home).unwrap();
    let bin = env!("CARGO_BIN_EXE_lotshift");
    // Standard input holds a passphrase, as a script gives it to `--passphrase-file -` (the
    // README's key lines read it there; the other commands leave it unread).
    let sh = |line: &str| {
        let mut child = Command::new("sh")
            .arg("-c")
            .arg(line)
            .current_dir(&dir)
            .env("L", bin)
            .env("HOME", &home)
            .stdin(std::process::Stdio::piped())
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        if let Some(mut stdin) = child.stdin.take() {
            use std::io::Write as _;
            // A command that never reads closes the pipe: not an error here.
            let _ = stdin.write_all(b"readme example passphrase\n");
        }
        child.wait_with_output().unwrap()
    };
    for line in &commands {
        let o = sh(line);
        let code = o.status.code();
        let allowed = code == Some(0) || (code == Some(1) && line.contains("--fail-on-shift"));
        assert!(
            allowed,
            "README command `{line}` exited with {code:?}\nstdout: {}\nstderr: {}",
            stdout(&o),
            stderr(&o)
        );
        // A documented `verify` reaches full verification (a partial one exits 3 above).
        if line.starts_with("$L verify ") {
            assert_eq!(
                stdout(&o).trim_end().lines().last(),
                Some("VERIFIED"),
                "README command `{line}`: {}",
                stdout(&o)
            );
        }
    }
    // The README signs the sample protocol: its two signatures are beside it.
    let beside = lots.join("hub-protocol.signatures.json");
    let p = lotshift::protocol::load(&lots.join("hub-protocol.json")).unwrap();
    assert!(beside.exists());
    assert_eq!(
        p.signatures
            .iter()
            .map(|s| s.meaning.as_str())
            .collect::<Vec<_>>(),
        ["authorship", "approval"]
    );
    // The screenshot line needs a display: run it under xvfb-run when installed (CI installs
    // it and sets LOTSHIFT_REQUIRE_DISPLAY=1), with the built binary for `cargo run --release --`.
    let have_xvfb = Command::new("sh")
        .arg("-c")
        .arg("command -v xvfb-run")
        .output()
        .is_ok_and(|o| o.status.success());
    if !cfg!(feature = "gui") {
        eprintln!("skipped the --screenshot line: built without the window");
    } else if !have_xvfb {
        assert!(
            std::env::var("LOTSHIFT_REQUIRE_DISPLAY").is_err(),
            "LOTSHIFT_REQUIRE_DISPLAY is set but xvfb-run is not installed"
        );
        eprintln!(
            "skipped the --screenshot line: xvfb-run is not installed (apt-get install xvfb xauth)"
        );
    } else {
        for line in &screenshots {
            let line = line.replace("cargo run --release --", "\"$L\"");
            let o = sh(&line);
            assert!(
                o.status.success(),
                "README command `{line}` exited with {:?}\nstderr: {}",
                o.status.code(),
                stderr(&o)
            );
            let png = line
                .split_whitespace()
                .skip_while(|w| *w != "--screenshot")
                .nth(1)
                .unwrap()
                .to_string();
            let bytes = std::fs::read(dir.join(&png)).expect("the screenshot was written");
            assert!(bytes.starts_with(b"\x89PNG"), "{png} is a PNG");
        }
    }
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn one_file_without_a_lot_column_names_the_likely_one() {
    let o = run(&["compare", sample("both-routes.csv").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(
        err.contains("give --lot-column COLUMN; \"route\" looks like one (values \"A\", \"B\")"),
        "{err}"
    );
    assert!(!err.trim_end().ends_with("holds"), "{err}");
}

#[test]
fn inspect_reports_the_decimal_mark_it_read() {
    // A semicolon file whose numbers use a decimal point: read correctly, and reported so.
    let dir = tmpdir("decimal");
    let f = dir.join("points.csv");
    std::fs::write(&f, "a;b\n1.5;2.25\n3.5;4.75\n").unwrap();
    let o = run(&["inspect", f.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains("delimiter   semicolon"), "{out}");
    assert!(out.contains("decimal     point"), "{out}");
    assert!(out.contains("1.5 | 2.25"), "{out}");
    std::fs::remove_dir_all(dir).unwrap();
}

/// A header written differently (`hub-length` for `hub length`) still pairs, and the pairing
/// is reported; the T² is the sample pair's (numpy/scipy, fixture key `sample_lots`).
/// A misspelt header cannot pair: the verdict opens by naming both columns, with the nearest
/// name, and `--strict-columns` turns it into an error.
#[test]
fn renamed_and_misspelt_columns_are_never_dropped_silently() {
    let dir = tmpdir("renamed");
    let text = std::fs::read_to_string(sample("candidate-route-b.csv")).unwrap();
    let (head, body) = text.split_once('\n').unwrap();
    let hyphen = dir.join("hyphen.csv");
    std::fs::write(
        &hyphen,
        format!("{}\n{body}", head.replace("hub length", "hub-length")),
    )
    .unwrap();
    let typo = dir.join("typo.csv");
    std::fs::write(
        &typo,
        format!("{}\n{body}", head.replace("hub length", "hub lenght")),
    )
    .unwrap();
    let reference = sample("reference-route-a.csv");
    let r = reference.to_str().unwrap();
    let want = common::reference_fixtures()["sample_lots"]["reference_candidate"]["t2"]
        .as_f64()
        .unwrap();
    let o = run(&[
        "compare",
        r,
        hyphen.to_str().unwrap(),
        "--permutations",
        "0",
        "--json",
        "-",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let rec: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let t2 = rec["hotelling"]["t2"].as_f64().unwrap();
    assert!((t2 - want).abs() < 1e-9 * want, "{t2} vs {want}");
    let o = run(&[
        "compare",
        r,
        hyphen.to_str().unwrap(),
        "--permutations",
        "0",
    ]);
    assert!(
        stdout(&o).contains(
            "paired by name: \"hub length (mm)\" (lot 1) with \"hub-length (mm)\" (lot 2)"
        ),
        "{}",
        stdout(&o)
    );
    let o = run(&["compare", r, typo.to_str().unwrap(), "--permutations", "0"]);
    assert!(o.status.success());
    let out = stdout(&o);
    let verdict = out
        .split("Verdict\n")
        .nth(1)
        .unwrap()
        .lines()
        .next()
        .unwrap();
    assert!(
        verdict.starts_with("  2 numeric columns were not compared: \"hub length (mm)\""),
        "{verdict}"
    );
    assert!(
        verdict.contains("nearest there: \"hub lenght (mm)\""),
        "{verdict}"
    );
    let o = run(&["compare", r, typo.to_str().unwrap(), "--strict-columns"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("2 numeric columns are not compared"),
        "{}",
        stderr(&o)
    );
    assert!(o.stdout.is_empty());
    std::fs::remove_dir_all(dir).unwrap();
}

/// The same file for both lots, a serial number measured twice or in both lots, and a
/// cavity-number column are each named (a test per mistake); units left out for missing
/// cells are named by row and label.
#[test]
fn input_mistakes_are_named() {
    let dir = tmpdir("mistakes");
    let r = sample("reference-route-a.csv");
    let r = r.to_str().unwrap();
    let o = run(&["compare", r, r, "--permutations", "0"]);
    let out = stdout(&o);
    let verdict = out
        .split("Verdict\n")
        .nth(1)
        .unwrap()
        .lines()
        .next()
        .unwrap();
    assert!(
        verdict.starts_with("  Both lots are the same file"),
        "{verdict}"
    );
    assert!(!out.contains("appear in both lots"), "{out}");
    // Row 19 of the reference lot has no mass (sample-lots/generate.py plants it).
    assert!(
        out.contains("left out of lot 1 for missing cells: row 19 (serial HX40-A-0018;"),
        "{out}"
    );
    assert!(out.contains("missing mass)"), "{out}");
    let text = std::fs::read_to_string(sample("candidate-route-b.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // Row 6 repeats row 4's serial; row 8 takes a serial of the reference lot; a cavity
    // number 1..4 is added to every unit.
    let serial = |l: &str| l.split(',').next().unwrap().to_string();
    let s4 = serial(&lines[3]);
    lines[5] = lines[5].replacen(&serial(&lines[5]), &s4, 1);
    lines[7] = lines[7].replacen(&serial(&lines[7]), "HX40-A-0007", 1);
    lines[0].push_str(",cavity");
    for (i, l) in lines.iter_mut().enumerate().skip(1) {
        l.push_str(&format!(",{}", 1 + i % 4));
    }
    let cand = dir.join("cand.csv");
    std::fs::write(&cand, lines.join("\n") + "\n").unwrap();
    let reftext = std::fs::read_to_string(sample("reference-route-a.csv")).unwrap();
    let mut rl: Vec<String> = reftext.lines().map(str::to_string).collect();
    rl[0].push_str(",cavity");
    for (i, l) in rl.iter_mut().enumerate().skip(1) {
        l.push_str(&format!(",{}", 1 + i % 4));
    }
    let refc = dir.join("ref.csv");
    std::fs::write(&refc, rl.join("\n") + "\n").unwrap();
    let o = run(&[
        "compare",
        refc.to_str().unwrap(),
        cand.to_str().unwrap(),
        "--permutations",
        "0",
        "--json",
        "-",
    ]);
    let rec: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let warnings: Vec<String> = rec["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect();
    let has = |s: &str| warnings.iter().any(|w| w.contains(s));
    assert!(has(&format!("\"{s4}\" on rows 4 and 6")), "{warnings:?}");
    assert!(
        has("appear in both lots") && has("\"HX40-A-0007\""),
        "{warnings:?}"
    );
    assert!(
        has("\"cavity\" holds only the whole numbers 1, 2, 3, 4"),
        "{warnings:?}"
    );
    std::fs::remove_dir_all(dir).unwrap();
}

/// A tiny candidate lot: the checks that cannot be computed are named with the reason, and
/// the result never claims that no check contradicts its assumptions.
#[test]
fn a_tiny_lot_says_which_checks_could_not_run() {
    let dir = tmpdir("tiny");
    let text = std::fs::read_to_string(sample("candidate-route-b.csv")).unwrap();
    let tiny = dir.join("tiny.csv");
    std::fs::write(
        &tiny,
        text.lines().take(3).collect::<Vec<_>>().join("\n") + "\n",
    )
    .unwrap();
    let r = sample("reference-route-a.csv");
    let o = run(&[
        "compare",
        r.to_str().unwrap(),
        tiny.to_str().unwrap(),
        "--json",
        "-",
        "--permutations",
        "0",
    ]);
    let rec: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let why = rec["favoured"]["why"].as_str().unwrap();
    assert!(!why.starts_with("no check contradicts"), "{why}");
    assert!(why.contains("Box's M needs more units"), "{why}");
    assert!(why.contains("Mardia's tests for \"tiny\""), "{why}");
    assert!(why.contains("Shapiro–Wilk needs at least 3 units"), "{why}");
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn every_output_names_the_direction_candidate_minus_reference() {
    // A mistake this guards against: reading a shift the wrong way round. The text, the HTML
    // report and the record all say candidate − reference, and the numbers agree with it:
    // each difference is the candidate's mean minus the reference's (arithmetic on the
    // record's own means).
    let dir = tmpdir("direction");
    let (json, html) = (dir.join("r.json"), dir.join("r.html"));
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
        "--json",
        json.to_str().unwrap(),
        "--html",
        html.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(
        out.contains("every difference is candidate − reference"),
        "{out}"
    );
    assert!(out.contains("Intervals for the mean difference, candidate − reference"));
    assert!(
        out.contains("The candidate's hub length is 0.0094 mm higher on average"),
        "{out}"
    );
    // Means to the data's resolution (three decimals in the files) plus one digit.
    assert!(out.contains("27.9956") && out.contains("28.0050"), "{out}");
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.contains("every difference is candidate minus reference"));
    assert!(page.contains("<th>cand. − ref.</th>"));
    assert!(
        page.contains("The candidate&#39;s hub length")
            || page.contains("The candidate's hub length")
    );
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(rec["schema"], "lotshift.comparison/2");
    for (k, row) in rec["per_characteristic"]
        .as_array()
        .unwrap()
        .iter()
        .enumerate()
    {
        let m = |g: usize| rec["lots"][g]["mean"][k].as_f64().unwrap();
        let d = row["difference"].as_f64().unwrap();
        assert!((d - (m(1) - m(0))).abs() < 1e-9 * m(0).abs(), "{k}");
        // The files carry three decimals in mm and two in g.
        let places = if row["unit"] == "g" { 2 } else { 3 };
        assert_eq!(row["lots"][0]["decimals"], places, "{k}");
        let iv = &rec["intervals"][k];
        assert_eq!(iv["difference"].as_f64().unwrap(), d);
    }
}

#[test]
fn fields_describe_the_comparison_in_the_record_text_and_report() {
    let dir = tmpdir("fields");
    let (json, html) = (dir.join("r.json"), dir.join("r.html"));
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
        "--field",
        "part=HX40 hub",
        "--field",
        "change request = CR-0193",
        "--field",
        "supplier=Route B works",
        "--json",
        json.to_str().unwrap(),
        "--html",
        html.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stdout(&o).contains("  change request: CR-0193"));
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(rec["fields"][0]["name"], "part");
    assert_eq!(rec["fields"][1]["value"], "CR-0193");
    assert_eq!(rec["fields"][2]["name"], "supplier");
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.contains("HX40 hub") && page.contains("Route B works"));
    // A standard entry left blank still shows on paper.
    assert!(
        page.contains("reference lot</th><td class=\"name\"><span class=\"muted\">(not given)")
    );
    // A malformed entry stops before anything is read or written.
    let o = run(&[
        "compare",
        sample("reference-route-a.csv").to_str().unwrap(),
        sample("candidate-route-b.csv").to_str().unwrap(),
        "--field",
        "part",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("--field takes NAME=VALUE"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn a_protocol_runs_as_fixed_and_a_change_is_a_recorded_deviation() {
    let dir = tmpdir("protocol");
    let protocol = sample("hub-protocol.json");
    let p = protocol.to_str().unwrap();
    // As fixed: its lots, characteristics, settings, specification and description.
    let json = dir.join("as-fixed.json");
    let o = run(&["compare", "--protocol", p, "--json", json.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stdout(&o).contains("run as the protocol fixes it: no deviation"));
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let bytes = std::fs::read(&protocol).unwrap();
    let sha = lotshift::data::hex(&<sha2::Sha256 as sha2::Digest>::digest(&bytes));
    assert_eq!(rec["protocol"]["sha256"], sha.as_str());
    assert_eq!(rec["protocol"]["deviations"].as_array().unwrap().len(), 0);
    assert_eq!(rec["settings"]["permutations"], 999);
    assert_eq!(rec["settings"]["seed"], 20_261_105);
    assert!(rec["specification"]["sha256"].is_string());
    assert_eq!(rec["fields"][1]["name"], "change request");
    // A change without a reason is refused, naming it, and nothing is written.
    let refused = dir.join("refused.json");
    let o = run(&[
        "compare",
        "--protocol",
        p,
        "--alpha",
        "0.01",
        "--json",
        refused.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("alpha: 0.01 (protocol: 0.05)"),
        "{}",
        stderr(&o)
    );
    assert!(!refused.exists());
    // With a reason it runs, and each difference is recorded with it.
    let json = dir.join("deviation.json");
    let html = dir.join("deviation.html");
    let o = run(&[
        "compare",
        "--protocol",
        p,
        "--alpha",
        "0.01",
        "--no-holdout",
        "--deviation",
        "customer asked for 99% confidence",
        "--json",
        json.to_str().unwrap(),
        "--html",
        html.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stdout(&o).contains("DEVIATION from the protocol: alpha: 0.01 (protocol: 0.05)"));
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let d = rec["protocol"]["deviations"].as_array().unwrap();
    assert_eq!(d.len(), 2, "{d:?}");
    assert_eq!(d[0]["what"], "alpha");
    assert_eq!(d[1]["what"], "leave one out");
    assert_eq!(d[1]["reason"], "customer asked for 99% confidence");
    assert_eq!(rec["alpha"], 0.01);
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(
        page.contains("id=\"deviations\"") && page.contains("customer asked for 99% confidence")
    );
    // A protocol with a key lotshift does not know is refused, naming the file and the place.
    let bad = dir.join("bad-protocol.json");
    std::fs::write(
        &bad,
        std::fs::read_to_string(&protocol)
            .unwrap()
            .replace("\"title\"", "\"titel\""),
    )
    .unwrap();
    let o = run(&["compare", "--protocol", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(
        e.contains("bad-protocol.json: line") && e.contains("titel"),
        "{e}"
    );
}
