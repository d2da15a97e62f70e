//! The window, driven headless through egui_kittest's accessibility tree: no display needed.

use crate::common;

use std::time::{Duration, Instant};

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable as _;
use lotshift::gui::worker::Slot;
use lotshift::gui::{LotshiftApp, Saved};

fn harness() -> Harness<'static, LotshiftApp> {
    let mut app = LotshiftApp::new(None, Saved::default());
    app.load_samples();
    let mut h = Harness::builder()
        .with_size(egui::vec2(1400.0, 900.0))
        .build_ui_state(|ui, app: &mut LotshiftApp| app.show(ui), app);
    settle(&mut h);
    h
}

/// T² of the bundled reference/candidate pair, computed independently with numpy from the
/// CSV files by tests/fixtures/make_fixtures.py (key `sample_lots`).
fn sample_t2() -> f64 {
    common::reference_fixtures()["sample_lots"]["reference_candidate"]["t2"]
        .as_f64()
        .unwrap()
}

/// Steps the window until the background work is done.
fn settle(h: &mut Harness<'static, LotshiftApp>) {
    let deadline = Instant::now() + Duration::from_secs(60);
    loop {
        h.step();
        if h.state().worker.idle() {
            break;
        }
        assert!(Instant::now() < deadline, "background work did not finish");
        std::thread::sleep(Duration::from_millis(10));
    }
    h.run_steps(3);
}

#[test]
fn sample_lots_load_and_every_view_shows_its_content() {
    let mut h = harness();
    assert!(h.state().result.is_current());
    // T² of the sample lots as numpy computes it (make_fixtures.py, key sample_lots).
    let want = sample_t2();
    let t2 = h.state().result.shown().unwrap().comparison.hotelling.t2;
    assert!(((t2 - want) / want).abs() < 1e-10, "{t2} against {want}");
    h.get_by_label_contains(&format!("The lots differ at alpha 0.05: T² = {want:.2}"));
    h.get_by_label("hub length (mm)");
    h.get_by_label("flange thickness (mm)");
    h.get_by_label_contains("This statistical result supports, and does not replace");
    h.get_by_label("Characteristics").click();
    h.run_steps(2);
    h.get_by_label("Copy table");
    h.get_by_label("hub length");
    h.get_by_label("Intervals").click();
    h.run_steps(2);
    h.get_by_label_contains("with 95% intervals, in pooled standard deviations");
    assert_eq!(
        h.get_all_by_label("Bonferroni").count(),
        2,
        "key and table header"
    );
    h.get_by_label("Pairs").click();
    h.run_steps(2);
    h.get_by_label("grid of leading pairs");
    h.get_by_label_contains("Mean difference region");
    h.get_by_label("Shift direction").click();
    h.run_steps(2);
    h.get_by_label_contains("With each unit held out");
}

#[test]
fn the_disposition_caution_is_under_every_view() {
    let mut h = harness();
    for view in lotshift::gui::View::ALL {
        h.state_mut().saved.view = view;
        h.run_steps(2);
        assert_eq!(
            h.get_all_by_label_contains("supports, and does not replace, the lot disposition")
                .count(),
            1,
            "{view:?}"
        );
    }
}

#[test]
fn view_names_on_the_command_line_are_the_tab_titles() {
    use lotshift::gui::View;
    for view in View::ALL {
        assert_eq!(View::from_name(view.name()), Some(view));
        let last = view.title().split(' ').next_back().unwrap().to_lowercase();
        assert_eq!(last, view.name(), "{}", view.title());
    }
    assert_eq!(View::from_name("overview"), None);
}

#[test]
fn a_bad_file_leaves_the_loaded_lots_alone() {
    let mut h = harness();
    let t2_before = h.state().result.shown().unwrap().comparison.hotelling.t2;
    let dir = std::env::temp_dir().join(format!("lotshift-gui-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let bad = dir.join("bad-lot.csv");
    std::fs::write(
        &bad,
        "bore diameter (mm),mass (g)\n12.0,141.2\n12.1,oops\n12.0,141.9\n",
    )
    .unwrap();
    h.state_mut().load_paths(Slot::Candidate, vec![bad]);
    settle(&mut h);
    h.get_by_label_contains("bad-lot.csv, row 3, column B \"mass (g)\"");
    let state = h.state();
    assert_eq!(
        state.lots.slots[1].as_ref().unwrap().name,
        "candidate-route-b"
    );
    assert_eq!(
        state.result.shown().unwrap().comparison.hotelling.t2,
        t2_before
    );
    assert!(state.result.is_current());
    h.get_by_label("Dismiss").click();
    h.run_steps(2);
    assert!(h.state().messages.is_empty());
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn unticking_a_characteristic_updates_the_result() {
    let mut h = harness();
    h.get_by_label("mass (g)").click();
    h.run_steps(1);
    settle(&mut h);
    let c = &h.state().result.shown().unwrap().comparison;
    assert_eq!(c.characteristics.len(), 4);
    assert!(!c.characteristics.iter().any(|n| n == "mass"));
    assert_eq!(c.hotelling.df1, 4.0);
}

#[test]
fn swapping_makes_the_candidate_the_reference() {
    let mut h = harness();
    let d = h.state().result.shown().unwrap().comparison.intervals[2].difference;
    h.get_by_label("Swap lots").click();
    h.run_steps(1);
    settle(&mut h);
    let c = &h.state().result.shown().unwrap().comparison;
    assert_eq!(c.lots[0].name, "candidate-route-b");
    assert!((c.intervals[2].difference + d).abs() < 1e-12 * d.abs());
}

#[test]
fn a_signed_summary_is_checked_against_the_loaded_lots() {
    use lotshift::report::sign::{self, Meaning};
    let mut h = harness();
    let dir = std::env::temp_dir().join(format!("lotshift-gui-sign-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // Sign the record the window shows, with a throwaway key.
    let key = ed25519_key();
    let record = h.state().result.shown().unwrap().record.clone();
    let summary = sign::sign(
        &record,
        &key,
        "Dana Whitfield",
        Meaning::Review,
        "2026-12-02T03:30:00Z",
    )
    .unwrap();
    let path = dir.join("summary.json");
    std::fs::write(&path, summary.to_json()).unwrap();
    h.state_mut().check_summary(&path);
    settle(&mut h);
    h.get_by_label_contains("signature valid — signed by Dana Whitfield");
    h.get_by_label_contains("every number matches the current result");
    // A tampered copy is reported as not verified.
    let bad = dir.join("bad.json");
    std::fs::write(&bad, summary.to_json().replacen("Dana", "Dan", 1)).unwrap();
    h.state_mut().check_summary(&bad);
    settle(&mut h);
    h.get_by_label_contains("NOT VERIFIED");
    let _ = std::fs::remove_dir_all(dir);
}

fn ed25519_key() -> ed25519_dalek::SigningKey {
    ed25519_dalek::SigningKey::from_bytes(&[9u8; 32])
}

#[test]
fn the_signing_form_offers_to_create_a_key_first() {
    let mut h = harness();
    h.get_by_label("Sign and export…").click();
    h.run_steps(2);
    h.get_by_label_contains("No signing key yet");
    h.get_by_label("Create a key in a folder…");
    h.get_by_label("Cancel").click();
    h.run_steps(2);
    assert!(h.state().signing.is_none());
}

#[test]
fn a_failed_or_cancelled_run_keeps_the_previous_result() {
    let mut h = harness();
    // Untick all but one characteristic, then the last: that run fails (nothing to compare).
    for name in [
        "bore diameter (mm)",
        "outer diameter (mm)",
        "hub length (mm)",
        "flange thickness (mm)",
    ] {
        h.get_by_label(name).click();
        h.run_steps(3);
    }
    settle(&mut h);
    let t2 = h.state().result.shown().unwrap().comparison.hotelling.t2;
    assert_eq!(
        h.state().result.shown().unwrap().comparison.characteristics,
        vec!["mass"]
    );
    h.get_by_label("mass (g)").click();
    h.run_steps(3);
    settle(&mut h);
    let state = h.state();
    assert_eq!(
        state.result.shown().unwrap().comparison.hotelling.t2,
        t2,
        "previous result kept"
    );
    assert!(!state.result.is_current(), "marked as not current");
    assert!(
        state
            .result
            .error()
            .unwrap_or_default()
            .contains("no characteristics"),
        "{:?}",
        state.result.error()
    );
    h.get_by_label_contains("results shown are from a previous run");
    // Tick one back and cancel at once: the old result stays until a run finishes.
    h.get_by_label("mass (g)").click();
    h.run_steps(1);
    h.state_mut().worker.cancel();
    settle(&mut h);
    assert_eq!(
        h.state().result.shown().unwrap().comparison.hotelling.t2,
        t2
    );
}

#[test]
fn one_file_with_a_lot_column_is_split_and_its_values_chosen() {
    let mut h = harness();
    let both = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-lots/both-routes.csv");
    h.state_mut().load_paths(Slot::Combined, vec![both]);
    settle(&mut h);
    {
        let c = &h.state().result.shown().unwrap().comparison;
        assert_eq!(
            (c.lots[0].name.as_str(), c.lots[1].name.as_str()),
            ("A", "B")
        );
    }
    h.get_by_label_contains("Lots in both-routes.csv");
    // The split gives the same comparison as the two separate files (T² by numpy).
    let t2 = h.state().result.shown().unwrap().comparison.hotelling.t2;
    let want = sample_t2();
    assert!(((t2 - want) / want).abs() < 1e-10, "{t2} against {want}");
    // Swapping swaps the lot values.
    h.get_by_label("Swap lots").click();
    h.run_steps(3);
    settle(&mut h);
    let c = &h.state().result.shown().unwrap().comparison;
    assert_eq!(
        (c.lots[0].name.as_str(), c.lots[1].name.as_str()),
        ("B", "A")
    );
}

#[test]
fn a_summary_signed_in_the_window_from_a_split_file_verifies_on_the_command_line() {
    use lotshift::report::sign::{self, Meaning};
    let mut h = harness();
    let both = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-lots/both-routes.csv");
    h.state_mut().load_paths(Slot::Combined, vec![both.clone()]);
    settle(&mut h);
    let dir = std::env::temp_dir().join(format!("lotshift-gui-split-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let key = ed25519_key();
    let record = h.state().result.shown().unwrap().record.clone();
    let summary = sign::sign(
        &record,
        &key,
        "Dana Whitfield",
        Meaning::Approval,
        "2026-12-02T04:00:00Z",
    )
    .unwrap();
    let path = dir.join("summary.json");
    std::fs::write(&path, summary.to_json()).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_lotshift"))
        .arg("verify")
        .arg(&path)
        .arg("--files")
        .arg(&both)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    // Every number matches; without a trusted-signers list the summary is only partially
    // verified (exit status 3).
    assert_eq!(out.status.code(), Some(3), "{text}");
    assert!(
        text.contains("every number in the record matches"),
        "{text}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

fn sha256_of(bytes: &[u8]) -> String {
    use sha2::Digest as _;
    lotshift::data::hex(&sha2::Sha256::digest(bytes))
}

/// The decision the command line's pipeline makes from the same files and specification.
fn pipeline_decision(spec: &std::path::Path) -> lotshift::analysis::decision::Decision {
    use lotshift::data::{self, LoadOptions};
    use lotshift::pipeline::{self, Request, SpecRequest};
    let options = LoadOptions::default();
    let mut lots = [
        data::load(&common::sample("reference-route-a.csv"), &options).unwrap(),
        data::load(&common::sample("candidate-route-b.csv"), &options).unwrap(),
    ];
    let request = Request {
        spec: SpecRequest {
            file: Some(data::spec::load_spec(spec, &options).unwrap()),
            ..SpecRequest::default()
        },
        ..Request::default()
    };
    let (_, c) = pipeline::run_owned(&mut lots, &request, &lotshift::analysis::Silent).unwrap();
    c.decision.unwrap()
}

#[test]
fn a_specification_file_loaded_in_the_window_updates_the_run_and_the_verdict() {
    let mut h = harness();
    // Without margins the verdict says what equivalence needs, and links to the editor.
    h.get_by_label_contains("Equivalence is not assessed: it needs margins");
    let path = common::sample("hub-spec.csv");
    h.state_mut().load_spec_path(path.clone());
    settle(&mut h);
    let state = h.state();
    assert!(state.result.is_current());
    let d = state.result.shown().unwrap().comparison.decision.clone();
    let d = d.expect("a decision");
    // The record names the file and its SHA-256.
    let spec = &d.specification;
    assert_eq!(spec.file.as_deref(), Some("hub-spec.csv"));
    let sha = sha256_of(&std::fs::read(&path).unwrap());
    assert_eq!(spec.sha256.as_deref(), Some(sha.as_str()));
    let recorded = state.result.shown().unwrap().record.specification.clone();
    assert_eq!(
        recorded,
        Some(lotshift::report::sections::SpecificationRecord::from(spec))
    );
    // The same decision as the command line's path, and its outcome leads the verdict view.
    assert_eq!(d, pipeline_decision(&path));
    let outcome = d.outcome.expect("margins give an outcome");
    h.get_by_label(outcome.words());
    assert_eq!(
        h.query_all_by_label_contains("Equivalence is not assessed")
            .count(),
        0
    );
    // The other views draw what the specification adds.
    h.get_by_label("Intervals").click();
    h.run_steps(2);
    h.get_by_label("Does it matter? Candidate − reference against the margins");
    h.get_by_label("Characteristics").click();
    h.run_steps(2);
    h.get_by_label_contains("Capability against the specification limits");
    h.get_by_label("Pairs").click();
    h.run_steps(2);
    h.get_by_label_contains("Green: the specification limits.");
    // The editor shows the file's cells and says the file is what is applied.
    h.get_by_label("Specification").click();
    h.run_steps(2);
    assert_eq!(
        h.get_by_label("hub length: upper limit").value().as_deref(),
        Some("28.1")
    );
    h.get_by_label_contains("Applied to the result: hub-spec.csv");
}

#[test]
fn a_bad_specification_file_leaves_the_lots_and_the_result_alone() {
    let mut h = harness();
    h.state_mut().load_spec_path(common::sample("hub-spec.csv"));
    settle(&mut h);
    let before = h.state().result.shown().unwrap().comparison.clone();
    assert!(before.decision.is_some());
    let dir = std::env::temp_dir().join(format!("lotshift-gui-spec-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // Content the loader refuses: the upper limit below the lower one.
    let bad = dir.join("bad-spec.csv");
    std::fs::write(&bad, "characteristic,lower,upper\nmass,143,142\n").unwrap();
    h.state_mut().load_spec_path(bad);
    settle(&mut h);
    h.get_by_label_contains("bad-spec.csv, row 2, column C \"upper\"");
    // A file that reads but names a characteristic the lots do not have.
    let stray = dir.join("stray-spec.csv");
    std::fs::write(&stray, "characteristic,margin\nhub lenght,0.02\n").unwrap();
    h.state_mut().load_spec_path(stray);
    settle(&mut h);
    h.get_by_label_contains("did you mean \"hub length\"");
    // A file that is not there.
    h.state_mut().load_spec_path(dir.join("missing.csv"));
    settle(&mut h);
    h.get_by_label_contains("missing.csv");
    let state = h.state();
    assert_eq!(state.messages.len(), 3, "{:?}", state.messages);
    assert_eq!(
        state.lots.slots[0].as_ref().unwrap().name,
        "reference-route-a"
    );
    assert_eq!(
        state.lots.slots[1].as_ref().unwrap().name,
        "candidate-route-b"
    );
    assert!(state.result.is_current());
    let after = &state.result.shown().unwrap().comparison;
    assert_eq!(after.hotelling.t2, before.hotelling.t2);
    assert_eq!(after.decision, before.decision);
    assert_eq!(
        state.spec.file.as_ref().map(|f| f.file_name.as_str()),
        Some("hub-spec.csv")
    );
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn an_invalid_cell_holds_the_run_and_shows_the_problem_beside_it() {
    let mut h = harness();
    let t2 = h.state().result.shown().unwrap().comparison.hotelling.t2;
    h.get_by_label("Specification tab").click();
    h.run_steps(2);
    assert_eq!(h.state().saved.view, lotshift::gui::View::Specification);
    h.get_by_label_contains(
        "Margins belong to the quality plan and are set before the data are seen",
    );
    // Type a limit that is not a number and finish the edit with Enter.
    h.get_by_label("hub length: lower limit").focus();
    h.run_steps(1);
    h.get_by_label("hub length: lower limit")
        .type_text("28,0,1");
    h.run_steps(1);
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    settle(&mut h);
    let state = h.state();
    assert!(state.result.is_held(), "the run is held");
    assert!(!state.worker.busy(), "no run started");
    assert!(!state.result.is_current());
    assert_eq!(state.result.shown().unwrap().comparison.hotelling.t2, t2);
    assert!(state.result.shown().unwrap().comparison.decision.is_none());
    // Beside the cell, and as the reason the run is held.
    h.get_by_label("lower limit: \"28,0,1\" is not a number");
    h.get_by_label_contains("1 problem to fix");
    h.get_by_label_contains("The comparison could not be made: the specification does not check");
    // An upper limit below the lower one, once the lower limit reads.
    h.get_by_label("hub length: lower limit").focus();
    h.run_steps(1);
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::A);
    h.get_by_label("hub length: lower limit").type_text("28.2");
    h.get_by_label("hub length: upper limit").focus();
    h.run_steps(1);
    h.get_by_label("hub length: upper limit").type_text("28.1");
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    settle(&mut h);
    assert!(h.state().result.is_held());
    h.get_by_label("upper limit: must be above the lower limit 28.2");
    // Fixed: the run goes ahead with the edited specification, named as edited.
    h.get_by_label("hub length: lower limit").focus();
    h.run_steps(1);
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::A);
    h.get_by_label("hub length: lower limit").type_text("27.9");
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    settle(&mut h);
    let state = h.state();
    assert!(!state.result.is_held() && state.result.is_current());
    let spec = &state
        .result
        .shown()
        .unwrap()
        .comparison
        .decision
        .as_ref()
        .unwrap()
        .specification;
    assert_eq!(spec.file.as_deref(), Some("(edited in the window)"));
    let rows = &state.spec.file.as_ref().unwrap().rows;
    assert_eq!((rows[0].lower, rows[0].upper), (Some(27.9), Some(28.1)));
    assert_eq!(
        spec.sha256.as_deref(),
        Some(sha256_of(lotshift::data::spec::to_csv(rows).as_bytes()).as_str())
    );
}

#[test]
fn a_specification_saved_from_the_window_is_what_the_record_names() {
    let mut h = harness();
    h.state_mut().load_spec_path(common::sample("hub-spec.csv"));
    settle(&mut h);
    // Edit a margin in the window, then save.
    h.state_mut().spec_editor.rows[2].margin = "0.025".into();
    h.state_mut().apply_spec();
    settle(&mut h);
    assert_eq!(
        h.state().spec.file.as_ref().unwrap().file_name,
        "(edited in the window)"
    );
    let dir = std::env::temp_dir().join(format!("lotshift-gui-save-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("hub-spec-revised.csv");
    h.state_mut().save_spec_to(Some(path.clone()));
    settle(&mut h);
    h.get_by_label_contains("Specification written to");
    let state = h.state();
    let spec = &state
        .result
        .shown()
        .unwrap()
        .comparison
        .decision
        .as_ref()
        .unwrap()
        .specification;
    assert_eq!(spec.file.as_deref(), Some("hub-spec-revised.csv"));
    let bytes = std::fs::read(&path).unwrap();
    assert_eq!(spec.sha256.as_deref(), Some(sha256_of(&bytes).as_str()));
    // The saved file reads back to the rows applied, and gives the same decision.
    let back =
        lotshift::data::spec::load_spec(&path, &lotshift::data::LoadOptions::default()).unwrap();
    assert_eq!(back.rows, state.spec.file.as_ref().unwrap().rows);
    assert_eq!(back.rows[2].margin, Some([-0.025, 0.025]));
    let d = state
        .result
        .shown()
        .unwrap()
        .comparison
        .decision
        .clone()
        .unwrap();
    assert_eq!(d, pipeline_decision(&path));
    // Signed in the window, the summary verifies on the command line against the saved file.
    use lotshift::report::sign::{self, Meaning};
    let record = state.result.shown().unwrap().record.clone();
    let summary = sign::sign(
        &record,
        &ed25519_key(),
        "Dana Whitfield",
        Meaning::Review,
        "2026-12-02T05:00:00Z",
    )
    .unwrap();
    let signed = dir.join("summary.json");
    std::fs::write(&signed, summary.to_json()).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_lotshift"))
        .arg("verify")
        .arg(&signed)
        .arg("--files")
        .arg(common::sample("reference-route-a.csv"))
        .arg(common::sample("candidate-route-b.csv"))
        .arg("--spec")
        .arg(&path)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    // Every number matches; without a trusted-signers list the summary is only partially
    // verified (exit status 3).
    assert_eq!(out.status.code(), Some(3), "{text}");
    assert!(
        text.contains("every number in the record matches"),
        "{text}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_specification_read_before_the_lots_waits_for_them() {
    // As `--spec FILE` at start may go: the file is read before the lots it is for. It is
    // checked against them once they arrive (a name they do not have is refused), or applied.
    use lotshift::data::{LoadOptions, spec::load_spec};
    use lotshift::gui::worker::Outcome;
    let dir = std::env::temp_dir().join(format!("lotshift-gui-start-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let stray = dir.join("stray-spec.csv");
    std::fs::write(&stray, "characteristic,margin\nhub lenght,0.02\nmass,0.4\n").unwrap();
    for (file, refused) in [(stray, true), (common::sample("hub-spec.csv"), false)] {
        let mut app = LotshiftApp::new(None, Saved::default());
        app.load_samples();
        // The lots are still being read: nothing has been absorbed yet.
        assert!(app.lots.slots.iter().all(Option::is_none));
        let spec = load_spec(&file, &LoadOptions::default()).unwrap();
        app.absorb(vec![Outcome::SpecLoaded(Ok(spec))]);
        let mut h = Harness::builder()
            .with_size(egui::vec2(1400.0, 900.0))
            .build_ui_state(|ui, app: &mut LotshiftApp| app.show(ui), app);
        settle(&mut h);
        let state = h.state();
        assert!(state.result.is_current());
        let decision = &state.result.shown().unwrap().comparison.decision;
        if refused {
            h.get_by_label_contains("did you mean \"hub length\"");
            assert!(decision.is_none());
            assert!(state.spec_editor.rows.iter().all(|r| r.is_blank()));
        } else {
            assert!(state.messages.is_empty(), "{:?}", state.messages);
            let d = decision.as_ref().expect("a decision");
            assert_eq!(d.specification.file.as_deref(), Some("hub-spec.csv"));
            assert_eq!(d, &pipeline_decision(&file));
        }
    }
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn signing_runs_in_the_background_and_delivers_its_outcome() {
    use lotshift::gui::action::Action;
    use lotshift::gui::signing::KeyStatus;
    use lotshift::report::sign;
    let mut h = harness();
    let dir = std::env::temp_dir().join(format!("lotshift-gui-worker-sign-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let key = sign::keygen(&dir, "signing-key", "Dana Whitfield", "a long passphrase").unwrap();
    h.state_mut().saved.signing_key = Some(key.display().to_string());
    // Opening the form does not touch the disk: the key is looked at in the background.
    h.state_mut().apply(Action::OpenSigning);
    {
        let state = h.state();
        let form = state.signing.as_ref().unwrap();
        assert_eq!(form.key, KeyStatus::Checking(key.display().to_string()));
        assert!(!state.worker.idle(), "a job is under way");
    }
    settle(&mut h);
    {
        let form = h.state().signing.as_ref().unwrap();
        assert_eq!(form.key, KeyStatus::Ready(key.display().to_string()));
        assert_eq!(form.protected, Some(true));
        assert_eq!(
            form.signer, "Dana Whitfield",
            "the name stored beside the key"
        );
    }
    h.get_by_label_contains("signing key: ");
    // The key is protected: the form asks for its passphrase (a password field).
    h.get_by_label("passphrase of the key");
    h.state_mut().signing.as_mut().unwrap().passphrase = "a long passphrase".into();
    // Signing: the action returns at once, with the signature still to be made.
    let out = dir.join("signed.json");
    h.state_mut().apply(Action::Sign(Some(out.clone())));
    {
        let state = h.state();
        assert!(state.signing.as_ref().unwrap().signing, "signing under way");
        assert!(state.notice.is_none());
        assert!(!state.worker.idle());
    }
    settle(&mut h);
    let state = h.state();
    assert!(state.signing.is_none(), "the form closes once signed");
    assert_eq!(state.saved.signer_name, "Dana Whitfield");
    let notice = state.notice.clone().unwrap_or_default();
    assert!(notice.contains("Record written to"), "{notice}");
    let summary = sign::verify_signature(&std::fs::read_to_string(&out).unwrap(), None).unwrap();
    assert_eq!(summary.signatures[0].signer, "Dana Whitfield");
    assert_eq!(summary.signatures[0].meaning.as_str(), "review");
    // Checked in the window (also in the background): the numbers are the current result's.
    h.state_mut().apply(Action::CheckSummary(out.clone()));
    assert!(!h.state().worker.idle());
    settle(&mut h);
    h.get_by_label_contains("signature valid — signed by Dana Whitfield");
    h.get_by_label_contains("every number matches the current result");
    // A second signature added to the opened summary, in the background: first with a wrong
    // passphrase (the file stays as it was), then with the right one.
    let before = std::fs::read(&out).unwrap();
    for (pass, added) in [("not the passphrase", false), ("a long passphrase", true)] {
        h.state_mut().apply(Action::OpenSigning);
        settle(&mut h);
        {
            let form = h.state_mut().signing.as_mut().unwrap();
            form.meaning = lotshift::report::sign::Meaning::Approval;
            form.comment = "approved for the trial".into();
            form.passphrase = pass.into();
        }
        h.state_mut().apply(Action::AddSignature(Some(out.clone())));
        assert!(!h.state().worker.idle());
        settle(&mut h);
        let state = h.state();
        if added {
            assert!(state.signing.is_none(), "the form closes once signed");
            let notice = state.notice.clone().unwrap_or_default();
            assert!(
                notice.contains("Signature 2 (approval by Dana Whitfield) added"),
                "{notice}"
            );
        } else {
            let problem = state
                .signing
                .as_ref()
                .unwrap()
                .problem
                .clone()
                .unwrap_or_default();
            assert!(problem.contains("the passphrase is wrong"), "{problem}");
            assert_eq!(std::fs::read(&out).unwrap(), before);
        }
    }
    let summary = sign::verify_signature(&std::fs::read_to_string(&out).unwrap(), None).unwrap();
    assert_eq!(summary.signatures.len(), 2);
    assert_eq!(
        summary.signatures[1].comment.as_deref(),
        Some("approved for the trial")
    );
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_key_that_does_not_read_is_reported_in_the_form_after_the_frame() {
    use lotshift::gui::action::Action;
    use lotshift::gui::signing::KeyStatus;
    let mut h = harness();
    let dir = std::env::temp_dir().join(format!("lotshift-gui-bad-key-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // A remembered key that is gone: the form offers to create one once it has looked.
    h.state_mut().saved.signing_key = Some(dir.join("gone.pem").display().to_string());
    h.state_mut().apply(Action::OpenSigning);
    settle(&mut h);
    assert_eq!(h.state().signing.as_ref().unwrap().key, KeyStatus::Missing);
    h.get_by_label_contains("No signing key yet");
    // A file that is there but is not a key.
    let bad = dir.join("not-a-key.pem");
    std::fs::write(&bad, "not a key").unwrap();
    h.state_mut().saved.signing_key = Some(bad.display().to_string());
    h.state_mut().apply(Action::OpenSigning);
    settle(&mut h);
    h.state_mut().signing.as_mut().unwrap().signer = "Dana Whitfield".into();
    let out = dir.join("signed.json");
    h.state_mut().apply(Action::Sign(Some(out.clone())));
    // The key is read in the background: nothing is known yet when the action returns.
    assert!(h.state().signing.as_ref().unwrap().problem.is_none());
    settle(&mut h);
    let form = h.state().signing.clone().expect("the form stays open");
    assert!(!form.signing);
    let problem = form.problem.unwrap_or_default();
    assert!(problem.contains("not-a-key.pem"), "{problem}");
    assert!(!out.exists());
    h.run_steps(2);
    h.get_by_label(&problem);
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_key_is_created_in_the_background_for_the_name_typed() {
    use lotshift::gui::action::Action;
    use lotshift::gui::signing::KeyStatus;
    use lotshift::gui::worker::{Outcome, Purpose};
    let mut h = harness();
    let dir = std::env::temp_dir().join(format!("lotshift-gui-new-key-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    h.state_mut().apply(Action::OpenSigning);
    h.run_steps(2);
    // The folder dialog closed with a folder, before a name was typed: the form asks for one.
    let chosen = || Outcome::Chosen {
        purpose: Purpose::KeyFolder,
        path: Some(dir.clone()),
    };
    h.state_mut().absorb(vec![chosen()]);
    h.run_steps(2);
    h.get_by_label_contains("Type your printed name first");
    h.state_mut().signing.as_mut().unwrap().signer = "Dana Whitfield".into();
    // Then a passphrase, which protects the new key.
    h.state_mut().absorb(vec![chosen()]);
    h.run_steps(2);
    h.get_by_label_contains("Type a passphrase of at least 8 characters first");
    h.state_mut().signing.as_mut().unwrap().passphrase = "a long passphrase".into();
    h.state_mut().absorb(vec![chosen()]);
    assert!(
        !h.state().worker.idle(),
        "the key is made in the background"
    );
    settle(&mut h);
    let state = h.state();
    let key = dir.join("lotshift-signing-key.pem");
    assert_eq!(state.saved.signing_key, Some(key.display().to_string()));
    assert_eq!(
        state.signing.as_ref().unwrap().key,
        KeyStatus::Ready(key.display().to_string())
    );
    assert!(key.exists());
    h.get_by_label_contains("Signing key created");
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn sorting_the_table_is_the_view_state_and_persists() {
    // The sort marks (▲ ▼) are not in the fonts the harness has: drawn as boxes here.
    let mut app = LotshiftApp::new(None, Saved::default());
    app.load_samples();
    let mut h = Harness::builder()
        .with_size(egui::vec2(1400.0, 900.0))
        .allow_missing_glyphs()
        .build_ui_state(|ui, app: &mut LotshiftApp| app.show(ui), app);
    settle(&mut h);
    h.get_by_label("Characteristics").click();
    h.run_steps(2);
    h.get_by_label("mean ref").click();
    h.run_steps(2);
    assert_eq!(h.state().table.sort, Some((3, true)));
    h.get_by_label("mean ref ▲").click();
    h.run_steps(2);
    assert_eq!(h.state().table.sort, Some((3, false)));
    h.get_by_label("mean ref ▼");
    assert_eq!(h.state().saved_now().table_sort, Some((3, false)));
}

#[test]
fn a_result_arriving_leaves_the_focus_in_the_cell_being_typed_in() {
    let mut h = harness();
    h.get_by_label("Specification tab").click();
    h.run_steps(2);
    // Hold the runs (the line saying so shows above the table), then fix the cell and move
    // on to the next one: a run starts, and its result arrives while the next cell has focus.
    h.get_by_label("hub length: lower limit").focus();
    h.run_steps(1);
    h.get_by_label("hub length: lower limit").type_text("x");
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    settle(&mut h);
    assert!(h.state().result.is_held());
    h.get_by_label("hub length: lower limit").focus();
    h.run_steps(1);
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::A);
    h.get_by_label("hub length: lower limit").type_text("27.9");
    h.get_by_label("hub length: upper limit").focus();
    h.run_steps(1);
    settle(&mut h);
    assert!(h.state().result.is_current(), "the result arrived");
    assert!(h.get_by_label("hub length: upper limit").is_focused());
    h.get_by_label("hub length: upper limit").type_text("28.1");
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    settle(&mut h);
    let row = h.state().spec_editor.row("hub length").unwrap();
    assert_eq!((row.lower.as_str(), row.upper.as_str()), ("27.9", "28.1"));
    let d = h
        .state()
        .result
        .current()
        .unwrap()
        .comparison
        .decision
        .clone();
    let spec = d.expect("a decision").specification;
    let entry = spec
        .characteristics
        .iter()
        .find(|e| e.characteristic == "hub length")
        .unwrap();
    assert_eq!((entry.lower, entry.upper), (Some(27.9), Some(28.1)));
}

/// A fresh folder for one test's files.
fn scratch(test: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("lotshift-gui-{test}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// A sample lot's text with `edit` applied to its header line and `extra` (a header and the
/// cell of row `k`) appended to every line.
fn sample_text(
    name: &str,
    edit: &dyn Fn(&str) -> String,
    extra: Option<(&str, &dyn Fn(usize) -> String)>,
) -> String {
    let text = std::fs::read_to_string(common::sample(name)).unwrap();
    let mut out = String::new();
    for (k, line) in text.lines().enumerate() {
        let mut line = if k == 0 { edit(line) } else { line.to_owned() };
        if let Some((header, cell)) = &extra {
            line.push(',');
            line.push_str(&if k == 0 {
                (*header).to_owned()
            } else {
                cell(k)
            });
        }
        out.push_str(&line);
        out.push('\n');
    }
    out
}

#[test]
fn two_files_loaded_together_ask_for_their_roles_until_confirmed() {
    let mut h = harness();
    // The bundled samples have fixed roles: nothing to confirm.
    assert_eq!(
        h.query_all_by_label_contains("Which file is which lot?")
            .count(),
        0
    );
    // Two files whose name order puts the candidate first, as a drop sorts them.
    let dir = scratch("roles");
    let same = |l: &str| l.to_owned();
    let cand = dir.join("candidate-lot.csv");
    let refr = dir.join("reference-lot.csv");
    std::fs::write(&cand, sample_text("candidate-route-b.csv", &same, None)).unwrap();
    std::fs::write(&refr, sample_text("reference-route-a.csv", &same, None)).unwrap();
    h.state_mut()
        .load_paths(Slot::Both, vec![cand.clone(), refr.clone()]);
    settle(&mut h);
    // The comparison ran, and the notice names each file with its role.
    assert!(h.state().result.is_current());
    h.get_by_label("Which file is which lot?");
    h.get_by_label("reference lot: candidate-lot.csv");
    h.get_by_label("candidate lot: reference-lot.csv");
    h.get_by_label("Swap the roles").click();
    h.run_steps(1);
    settle(&mut h);
    {
        let c = &h.state().result.shown().unwrap().comparison;
        assert_eq!(c.lots[0].name, "reference-lot");
        assert_eq!(c.lots[1].name, "candidate-lot");
        let want = sample_t2();
        let t2 = c.hotelling.t2;
        assert!(((t2 - want) / want).abs() < 1e-10, "{t2} against {want}");
    }
    // The notice stays until the roles are confirmed.
    h.get_by_label("reference lot: reference-lot.csv");
    h.get_by_label("candidate lot: candidate-lot.csv");
    h.get_by_label("These roles are right").click();
    h.run_steps(2);
    assert_eq!(
        h.query_all_by_label_contains("Which file is which lot?")
            .count(),
        0
    );
    assert!(!h.state().lots.roles_to_confirm);
    // One file chosen for one slot settles the roles: no notice.
    h.state_mut()
        .load_paths(Slot::Both, vec![cand.clone(), refr.clone()]);
    settle(&mut h);
    h.get_by_label("Which file is which lot?");
    h.state_mut()
        .load_paths(Slot::Candidate, vec![refr.clone()]);
    settle(&mut h);
    assert!(!h.state().lots.roles_to_confirm);
    // Nor when the user gave the order (the command line: reference, then candidate).
    h.state_mut().load_in_order(vec![refr, cand]);
    settle(&mut h);
    assert_eq!(
        h.state().result.shown().unwrap().comparison.lots[0].name,
        "reference-lot"
    );
    assert!(!h.state().lots.roles_to_confirm);
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_split_file_says_which_value_is_which_lot() {
    let mut h = harness();
    h.state_mut()
        .load_paths(Slot::Combined, vec![common::sample("both-routes.csv")]);
    settle(&mut h);
    h.get_by_label("reference lot: the rows where route is \"A\"");
    h.get_by_label("candidate lot: the rows where route is \"B\"");
    h.get_by_label("Swap lots").click();
    h.run_steps(1);
    settle(&mut h);
    h.get_by_label("reference lot: the rows where route is \"B\"");
    h.get_by_label("candidate lot: the rows where route is \"A\"");
}

#[test]
fn a_misspelt_header_is_paired_only_by_the_click() {
    let mut h = harness();
    let dir = scratch("pairing");
    let refr = dir.join("reference.csv");
    let cand = dir.join("candidate.csv");
    let same = |l: &str| l.to_owned();
    let misspell = |l: &str| l.replace("hub length (mm)", "hub lenght (mm)");
    std::fs::write(&refr, sample_text("reference-route-a.csv", &same, None)).unwrap();
    std::fs::write(&cand, sample_text("candidate-route-b.csv", &misspell, None)).unwrap();
    h.state_mut().load_paths(Slot::Both, vec![refr, cand]);
    settle(&mut h);
    // Listed beside the lot slots, and not compared until the click.
    h.get_by_label("\"hub length (mm)\": only in the reference lot, not compared");
    h.get_by_label("\"hub lenght (mm)\": only in the candidate lot, not compared");
    {
        let s = h.state().result.shown().unwrap();
        assert_eq!(s.comparison.characteristics.len(), 4);
        assert!(s.record.pairings.is_empty());
    }
    h.get_by_label("pair with hub length").click();
    h.run_steps(1);
    settle(&mut h);
    let s = h.state().result.shown().unwrap();
    assert_eq!(s.comparison.characteristics.len(), 5);
    // The same T² as the correctly named files (numpy, make_fixtures.py).
    let want = sample_t2();
    let t2 = s.comparison.hotelling.t2;
    assert!(((t2 - want) / want).abs() < 1e-10, "{t2} against {want}");
    // The record names both headers as read.
    assert_eq!(s.record.pairings.len(), 1);
    assert_eq!(s.record.pairings[0].reference, "hub length (mm)");
    assert_eq!(s.record.pairings[0].candidate, "hub lenght (mm)");
    assert!(
        s.record.not_compared.is_empty(),
        "{:?}",
        s.record.not_compared
    );
    // The candidate lot as read keeps its header and name.
    let lot = h.state().lots.slots[1].clone().unwrap();
    assert!(lot.columns.iter().any(|c| c.name == "hub lenght"));
    h.get_by_label_contains("compared as one characteristic: the reference's \"hub length (mm)\"");
    assert_eq!(h.query_all_by_label("pair with hub length").count(), 0);
    // Undo puts it back.
    h.get_by_label("undo").click();
    h.run_steps(1);
    settle(&mut h);
    let s = h.state().result.shown().unwrap();
    assert_eq!(s.comparison.characteristics.len(), 4);
    assert!(s.record.pairings.is_empty());
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_code_column_is_read_as_a_label_with_one_click() {
    let mut h = harness();
    let dir = scratch("code");
    let refr = dir.join("reference.csv");
    let cand = dir.join("candidate.csv");
    let same = |l: &str| l.to_owned();
    let cavity = |k: usize| (1 + k % 4).to_string();
    std::fs::write(
        &refr,
        sample_text("reference-route-a.csv", &same, Some(("cavity", &cavity))),
    )
    .unwrap();
    std::fs::write(
        &cand,
        sample_text("candidate-route-b.csv", &same, Some(("cavity", &cavity))),
    )
    .unwrap();
    h.state_mut().load_paths(Slot::Both, vec![refr, cand]);
    settle(&mut h);
    {
        // Compared, with the warning, until the user says otherwise.
        let c = &h.state().result.shown().unwrap().comparison;
        assert_eq!(c.characteristics.len(), 6);
        assert!(
            c.warnings
                .iter()
                .any(|w| w.starts_with("\"cavity\" holds only the whole numbers")),
            "{:?}",
            c.warnings
        );
    }
    h.get_by_label("read cavity as a label").click();
    h.run_steps(1);
    settle(&mut h);
    let c = &h.state().result.shown().unwrap().comparison;
    assert!(!c.characteristics.iter().any(|n| n == "cavity"));
    assert_eq!(c.characteristics.len(), 5);
    assert!(!c.warnings.iter().any(|w| w.contains("\"cavity\" holds")));
    let want = sample_t2();
    let t2 = c.hotelling.t2;
    assert!(((t2 - want) / want).abs() < 1e-10, "{t2} against {want}");
    assert_eq!(h.query_all_by_label("read cavity as a label").count(), 0);
    // The tick box in the side panel shows it unticked.
    assert!(h.state().lots.excluded.contains("cavity"));
    let _ = std::fs::remove_dir_all(dir);
}

/// A margin is a candidate − reference range: swapping the lots mirrors an asymmetric margin
/// (below and above exchanged), so the same limits of the plan apply to the new roles.
#[test]
fn swapping_the_lots_mirrors_an_asymmetric_margin() {
    let mut h = harness();
    h.state_mut().load_spec_path(common::sample("hub-spec.csv"));
    settle(&mut h);
    {
        let row = &mut h.state_mut().spec_editor.rows[2];
        row.set_asymmetric(true);
        row.below = "0.01".into();
        row.above = "0.03".into();
    }
    h.state_mut().apply_spec();
    settle(&mut h);
    let margin = |h: &Harness<'static, LotshiftApp>| {
        let d = h
            .state()
            .result
            .shown()
            .unwrap()
            .comparison
            .decision
            .clone()
            .unwrap();
        d.specification.characteristics[2].margin.unwrap()
    };
    assert_eq!(margin(&h), [-0.01, 0.03]);
    h.state_mut().swap();
    settle(&mut h);
    assert_eq!(
        h.state().result.shown().unwrap().comparison.lots[0].name,
        "candidate-route-b"
    );
    assert_eq!(margin(&h), [-0.03, 0.01]);
}

#[test]
fn a_unit_set_aside_in_the_window_is_left_out_recorded_and_put_back() {
    use lotshift::gui::action::Action;
    let mut h = harness();
    let before = h.state().result.shown().unwrap().comparison.clone();
    let lot = h.state().lots.slots[1].clone().unwrap();
    let row = lot.rows[3];
    h.state_mut().apply(Action::SetUnitAside {
        lot: 1,
        row,
        labels: vec![],
        reason: "gauge fault, remeasured".into(),
    });
    settle(&mut h);
    let s = h.state().result.shown().unwrap();
    assert_eq!(s.comparison.lots[1].n, before.lots[1].n - 1);
    assert_eq!(s.record.exclusions.len(), 1);
    assert_eq!(s.record.exclusions[0].row, row);
    assert_eq!(s.record.exclusions[0].reason, "gauge fault, remeasured");
    // The same exclusion through the command line's path gives the same T² (one pipeline).
    let mut lots = [
        (*h.state().lots.slots[0].clone().unwrap()).clone(),
        (*lot).clone(),
    ];
    let request = lotshift::pipeline::Request {
        exclusions: vec![lotshift::data::exclusions::Exclusion {
            lot: 1,
            row,
            labels: vec![],
            reason: "gauge fault, remeasured".into(),
        }],
        ..lotshift::pipeline::Request::default()
    };
    let (_, c) =
        lotshift::pipeline::run_owned(&mut lots, &request, &lotshift::analysis::Silent).unwrap();
    assert!((c.hotelling.t2 - s.comparison.hotelling.t2).abs() < 1e-9 * c.hotelling.t2);
    h.get_by_label_contains(&format!("set aside: candidate lot, row {row}"));
    h.get_by_label("put back");
    h.state_mut().apply(Action::RestoreUnit { lot: 1, row });
    settle(&mut h);
    let s = h.state().result.shown().unwrap();
    assert_eq!(s.comparison.lots[1].n, before.lots[1].n);
    assert!(s.record.exclusions.is_empty());
    assert!((s.comparison.hotelling.t2 - before.hotelling.t2).abs() < 1e-12 * before.hotelling.t2);
}

#[test]
fn the_description_typed_in_the_window_goes_into_the_record_and_survives_a_rerun() {
    let mut h = harness();
    h.get_by_label("About this comparison (for the record)");
    h.state_mut().fields[0] = "HX40 hub".into();
    h.state_mut().fields[3] = " CR-0193 ".into();
    h.state_mut().sync_fields();
    let fields =
        |h: &Harness<'static, LotshiftApp>| h.state().result.shown().unwrap().record.fields.clone();
    let f = fields(&h);
    assert_eq!(f.len(), 2);
    assert_eq!(
        (f[0].name.as_str(), f[0].value.as_str()),
        ("part", "HX40 hub")
    );
    assert_eq!(
        (f[1].name.as_str(), f[1].value.as_str()),
        ("change request", "CR-0193")
    );
    // A new run keeps what was typed.
    h.state_mut().apply(lotshift::gui::action::Action::Rerun);
    settle(&mut h);
    assert_eq!(fields(&h), f);
}

#[test]
fn a_protocol_fixes_the_window_and_a_change_waits_for_its_reason() {
    use lotshift::gui::action::Action;
    let mut app = LotshiftApp::new(None, Saved::default());
    app.load_protocol(&common::sample("hub-protocol.json"));
    let mut h = Harness::builder()
        .with_size(egui::vec2(1400.0, 900.0))
        .build_ui_state(|ui, app: &mut LotshiftApp| app.show(ui), app);
    settle(&mut h);
    // Its lots, settings and specification are in; the run is as fixed.
    h.get_by_label_contains("Protocol:");
    h.get_by_label("— run as fixed");
    {
        let s = h.state().result.shown().expect("a result");
        assert_eq!(s.comparison.settings.permutations, 999);
        assert_eq!(s.comparison.settings.seed, 20_261_105);
        assert!(
            s.comparison.decision.is_some(),
            "the protocol's specification is applied"
        );
        let p = s
            .record
            .protocol
            .as_ref()
            .expect("the record names the protocol");
        assert!(p.deviations.is_empty());
        assert_eq!(s.record.fields[0].name, "part");
    }
    // A change of a setting holds the run until a reason is given.
    let mut settings = h.state().saved.settings.clone();
    settings.alpha = 0.01;
    h.state_mut().apply(Action::Settings(Box::new(settings)));
    h.state_mut().apply(Action::Rerun);
    settle(&mut h);
    assert!(h.state().result.is_held());
    h.get_by_label(
        "The protocol is not signed: nobody's authorship, review or approval of it is recorded.",
    );
    h.get_by_label("This comparison differs from the protocol:");
    h.get_by_label("  alpha: 0.01 (protocol: 0.05)");
    h.state_mut().apply(Action::AcceptDeviations(
        "customer asked for 99% confidence".into(),
    ));
    settle(&mut h);
    let s = h.state().result.shown().unwrap();
    assert!(h.state().result.is_current());
    assert_eq!(s.comparison.alpha(), 0.01);
    let d = &s.record.protocol.as_ref().unwrap().deviations;
    assert_eq!(d.len(), 1);
    assert_eq!(
        (d[0].what.as_str(), d[0].used.as_str(), d[0].reason.as_str()),
        ("alpha", "0.01", "customer asked for 99% confidence")
    );
    h.get_by_label("— 1 deviation recorded");
}

#[test]
fn every_run_in_the_window_goes_into_the_audit_trail_and_verify_checks_it() {
    use lotshift::gui::action::Action;
    use lotshift::report::sign::{self, Meaning};
    let dir = std::env::temp_dir().join(format!("lotshift-gui-trail-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let trail = dir.join("audit-trail.jsonl");
    let mut app = LotshiftApp::new(None, Saved::default());
    app.trail = Some(lotshift::report::trail::Trail::at(trail.clone()));
    app.load_samples();
    let mut h = Harness::builder()
        .with_size(egui::vec2(1400.0, 900.0))
        .build_ui_state(|ui, app: &mut LotshiftApp| app.show(ui), app);
    settle(&mut h);
    // A second run with one characteristic unticked: both are in the trail and the record.
    h.state_mut().apply(Action::SetCompared {
        key: lotshift::data::match_key("mass"),
        compared: false,
    });
    h.state_mut().apply(Action::Rerun);
    settle(&mut h);
    let chain = lotshift::report::trail::read_chain(&trail).unwrap();
    assert_eq!(chain.len(), 2);
    assert!(!chain[1].characteristics.iter().any(|c| c == "mass"));
    let record = h.state().result.shown().unwrap().record.clone();
    let audit = record
        .audit_trail
        .clone()
        .expect("the record lists the runs");
    assert_eq!(audit.runs.len(), 2);
    assert_eq!(audit.final_hash, chain[1].hash);
    assert!(
        audit.runs[0].headline.contains("T² ="),
        "{}",
        audit.runs[0].headline
    );
    // Signed, the summary verifies against the trail; an edited trail does not.
    let key = ed25519_key();
    let summary = sign::sign(
        &record,
        &key,
        "Dana Whitfield",
        Meaning::Authorship,
        "2026-12-02T10:00:00Z",
    )
    .unwrap();
    let path = dir.join("summary.json");
    std::fs::write(&path, summary.to_json()).unwrap();
    let verify = |trail: &std::path::Path| {
        std::process::Command::new(env!("CARGO_BIN_EXE_lotshift"))
            .args([
                "verify",
                path.to_str().unwrap(),
                "--trail",
                trail.to_str().unwrap(),
            ])
            .output()
            .unwrap()
    };
    let o = verify(&trail);
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    assert!(out.contains("2 entries, chain intact"), "{out}");
    // The trail holds, but with no trusted list and no lot files the summary is only
    // partially verified: its own status, never the one of a verified summary.
    assert_eq!(
        o.status.code(),
        Some(i32::from(lotshift::exit::EXIT_PARTIALLY_VERIFIED)),
        "{out}"
    );
    assert!(out.contains("PARTIALLY VERIFIED"), "{out}");
    let edited = dir.join("edited.jsonl");
    let text = std::fs::read_to_string(&trail).unwrap();
    std::fs::write(
        &edited,
        text.replacen("the lots differ", "no difference detected", 1),
    )
    .unwrap();
    let o = verify(&edited);
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("NOT VERIFIED") && out.contains("line 1") && out.contains("edited"),
        "{out}"
    );
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_signature_is_added_to_a_protocol_or_a_summary_without_a_comparison() {
    use lotshift::gui::action::Action;
    use lotshift::report::sign;
    // A window with nothing loaded: the top bar still opens the form, which can sign files
    // on disk but not a comparison (there is none).
    let app = LotshiftApp::new(None, Saved::default());
    let mut h = Harness::builder()
        .with_size(egui::vec2(1400.0, 900.0))
        .build_ui_state(|ui, app: &mut LotshiftApp| app.show(ui), app);
    settle(&mut h);
    assert!(h.state().result.shown().is_none());
    let dir = std::env::temp_dir().join(format!("lotshift-gui-sign-file-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for f in [
        "hub-protocol.json",
        "reference-route-a.csv",
        "candidate-route-b.csv",
        "hub-spec.csv",
    ] {
        std::fs::copy(common::sample(f), dir.join(f)).unwrap();
    }
    let key = sign::keygen(&dir, "signing-key", "Cleo Marsh", "a long passphrase").unwrap();
    h.state_mut().saved.signing_key = Some(key.display().to_string());
    h.get_by_label("Add my signature…").click();
    settle(&mut h);
    assert!(
        h.state().signing.is_some(),
        "the form opens without a result"
    );
    let disabled = |h: &Harness<'static, LotshiftApp>, label: &str| {
        use egui_kittest::kittest::NodeT as _;
        h.get_by_label(label).accesskit_node().is_disabled()
    };
    assert!(disabled(&h, "Sign and save…"), "nothing to sign");
    assert!(!disabled(&h, "Add my signature to a file…"));
    // The protocol: its signature goes beside it.
    {
        let form = h.state_mut().signing.as_mut().unwrap();
        form.meaning = sign::Meaning::Approval;
        form.comment = "protocol approved".into();
        form.passphrase = "a long passphrase".into();
    }
    let protocol = dir.join("hub-protocol.json");
    h.state_mut()
        .apply(Action::AddSignature(Some(protocol.clone())));
    settle(&mut h);
    let notice = h.state().notice.clone().unwrap_or_default();
    assert!(
        notice.contains("Signature 1 (approval by Cleo Marsh) added to the protocol"),
        "{notice}"
    );
    let p = lotshift::protocol::load(&protocol).unwrap();
    assert_eq!(p.signatures.len(), 1);
    assert_eq!(p.signatures[0].signer, "Cleo Marsh");
    assert_eq!(
        p.signatures[0].comment.as_deref(),
        Some("protocol approved")
    );
    // A signed summary made elsewhere takes a second signature the same way.
    let record = {
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_lotshift"))
            .args([
                "compare",
                "--protocol",
                protocol.to_str().unwrap(),
                "--json",
                "-",
            ])
            .output()
            .unwrap();
        assert!(o.status.success());
        serde_json::from_slice::<serde_json::Value>(&o.stdout).unwrap()
    };
    let summary = sign::sign_value(
        record,
        &ed25519_key(),
        "Ana Lind",
        sign::Meaning::Authorship,
        "2026-12-03T09:00:00Z",
    )
    .unwrap();
    let path = dir.join("summary.json");
    std::fs::write(&path, summary.to_json()).unwrap();
    h.state_mut().apply(Action::OpenSigning);
    settle(&mut h);
    h.state_mut().signing.as_mut().unwrap().passphrase = "a long passphrase".into();
    h.state_mut()
        .apply(Action::AddSignature(Some(path.clone())));
    settle(&mut h);
    let s = sign::verify_sequence(&std::fs::read_to_string(&path).unwrap()).unwrap();
    assert_eq!(s.signatures.len(), 2);
    assert_eq!(s.signatures[1].signer, "Cleo Marsh");
    assert!(h.state().result.shown().is_none(), "no comparison was run");
    // The protocol, opened in the window, says who signed it.
    h.state_mut().load_protocol(&protocol);
    settle(&mut h);
    h.get_by_label_contains(&format!(
        "Protocol signed: approval by Cleo Marsh on {} (UTC)",
        p.signatures[0].signed_at
    ));
    let _ = std::fs::remove_dir_all(dir);
}

/// The sample database: the sample lots as the rows of one table, told apart by `route`.
fn sample_database() -> String {
    format!(
        "sqlite:{}",
        concat!(env!("CARGO_MANIFEST_DIR"), "/sample-lots/hub-lots.sqlite")
    )
}

/// Fills the database form (opened from the top bar) for the sample database.
fn fill_database_form(h: &mut Harness<'static, LotshiftApp>, query: &str, in_database: bool) {
    h.get_by_label("Open from a database…").click();
    h.run_steps(2);
    let form = &mut h.state_mut().db_form;
    assert!(form.open, "the form opens");
    form.url = sample_database();
    form.query = query.into();
    form.lot_column = "route".into();
    form.values = ["A".into(), "B".into()];
    form.in_database = in_database;
    h.run_steps(2);
}

#[test]
fn lots_read_from_a_database_replace_the_loaded_lots() {
    let mut h = harness();
    fill_database_form(&mut h, "SELECT * FROM hub_measurements", false);
    h.get_by_label("Read the lots").click();
    h.run_steps(1);
    settle(&mut h);
    let state = h.state();
    assert!(state.messages.is_empty(), "{:?}", state.messages);
    assert!(!state.db_form.open, "the form closes on success");
    let lots = state.lots.slots.clone().map(Option::unwrap);
    assert_eq!(lots[0].provenance.format, "sqlite");
    assert_eq!(
        lots[0].provenance.query.as_deref(),
        Some("SELECT * FROM hub_measurements")
    );
    assert_eq!((lots[0].len(), lots[1].len()), (40, 40));
    assert!(state.result.is_current());
    let shown = state.result.shown().unwrap();
    assert!(!shown.in_database());
    let want = sample_t2();
    let t2 = shown.comparison.hotelling.t2;
    assert!(((t2 - want) / want).abs() < 1e-9, "{t2} against {want}");
    // The rows are units: the unit plots are there.
    h.get_by_label("Pairs").click();
    h.run_steps(2);
    h.get_by_label("grid of leading pairs");
    // Remembered for the next session, without a password.
    let r = &h.state().saved.recent_sources[0];
    assert_eq!(r.url, sample_database());
    assert_eq!(r.lot_column, "route");
    assert!(!r.in_database);
}

#[test]
fn a_comparison_inside_the_database_shows_what_was_computed_and_reruns() {
    let mut h = harness();
    fill_database_form(&mut h, "SELECT * FROM hub_measurements", true);
    h.get_by_label("Compare in the database").click();
    h.run_steps(1);
    settle(&mut h);
    let state = h.state();
    assert!(state.messages.is_empty(), "{:?}", state.messages);
    assert!(state.result.is_current());
    let shown = state.result.shown().unwrap();
    assert!(shown.in_database());
    assert!(shown.comparison.in_database.is_some());
    let want = sample_t2();
    let t2 = shown.comparison.hotelling.t2;
    assert!(((t2 - want) / want).abs() < 1e-9, "{t2} against {want}");
    let p = shown.comparison.characteristics.len();
    assert!(shown.record.lots[0].source.as_ref().unwrap().in_database);
    // The views that work from the comparison show it; those that need units say so.
    h.get_by_label_contains(&format!("The lots differ at alpha 0.05: T² = {want:.2}"));
    h.get_by_label_contains("Not computed inside the database:");
    h.get_by_label("Lots compared inside the database");
    h.get_by_label_contains("reference: route = \"A\", 40 rows, 39 units used");
    h.get_by_label("Characteristics").click();
    h.run_steps(2);
    h.get_by_label("hub length");
    h.get_by_label("Intervals").click();
    h.run_steps(2);
    h.get_by_label_contains("with 95% intervals, in pooled standard deviations");
    h.get_by_label("Pairs").click();
    h.run_steps(2);
    h.get_by_label(lotshift::gui::pairs::NOT_COMPUTED_PAIRS);
    assert!(h.query_by_label("grid of leading pairs").is_none());
    h.get_by_label("Shift direction").click();
    h.run_steps(2);
    h.get_by_label(lotshift::gui::direction::NOT_COMPUTED_SCORES);
    // A change of settings runs the aggregate statements again.
    let settings = lotshift::analysis::Settings {
        alpha: 0.01,
        ..h.state().saved.settings.clone()
    };
    h.state_mut()
        .apply(lotshift::gui::action::Action::Settings(Box::new(settings)));
    h.state_mut().apply(lotshift::gui::action::Action::Rerun);
    settle(&mut h);
    let shown = h.state().result.current().expect("a current result");
    assert!(shown.in_database());
    assert_eq!(shown.comparison.alpha(), 0.01);
    assert!(((shown.comparison.hotelling.t2 - want) / want).abs() < 1e-9);
    // Unticking a characteristic in the side panel compares the others inside the database.
    h.get_by_label("mass (g)").click();
    h.run_steps(1);
    settle(&mut h);
    let shown = h.state().result.current().expect("a current result");
    assert!(shown.in_database());
    assert_eq!(shown.comparison.characteristics.len(), p - 1);
    assert!(!shown.comparison.characteristics.iter().any(|c| c == "mass"));
    assert!(h.state().saved.recent_sources[0].in_database);
}

#[test]
fn a_bad_database_source_leaves_the_loaded_lots_and_shows_the_error() {
    let mut h = harness();
    let t2 = h.state().result.shown().unwrap().comparison.hotelling.t2;
    let cases = [
        (
            "SELECT * FROM no_such_table",
            "route",
            false,
            "the query failed",
        ),
        (
            "SELECT * FROM no_such_table",
            "route",
            true,
            "the query failed",
        ),
        ("SELECT * FROM hub_measurements", "lot", false, "lot"),
        (
            "SELECT * FROM hub_measurements WHERE route = 'A'",
            "route",
            false,
            "B",
        ),
        ("SELECT * FROM hub_measurements WHERE 0", "route", true, ""),
    ];
    for (query, column, in_database, says) in cases {
        fill_database_form(&mut h, query, in_database);
        h.state_mut().db_form.lot_column = column.into();
        h.state_mut().db_form.values = ["A".into(), "B".into()];
        h.state_mut()
            .apply(lotshift::gui::action::Action::RunDatabase);
        settle(&mut h);
        let state = h.state();
        assert_eq!(state.messages.len(), 1, "{query}: {:?}", state.messages);
        let m = &state.messages[0];
        assert!(m.contains(says), "{query}: {m}");
        assert!(!m.contains('\n'), "one line: {m}");
        assert_eq!(
            state.lots.slots[1].as_ref().unwrap().name,
            "candidate-route-b",
            "{query}"
        );
        assert!(state.database.is_none());
        assert!(state.result.is_current(), "{query}");
        assert_eq!(state.result.shown().unwrap().comparison.hotelling.t2, t2);
        assert!(!state.result.shown().unwrap().in_database());
        h.get_by_label_contains(m.as_str());
        h.get_by_label("Dismiss").click();
        h.run_steps(2);
        assert!(h.state().messages.is_empty());
    }
    // A form that names no source says why in the form, and nothing runs.
    h.state_mut().db_form.url = "mysql://host/db".into();
    h.state_mut()
        .apply(lotshift::gui::action::Action::RunDatabase);
    assert!(h.state().worker.idle());
    let problem = h.state().db_form.problem.clone().unwrap();
    assert!(problem.contains("sqlite:PATH"), "{problem}");
    h.run_steps(2);
    h.get_by_label_contains("is not a database URL lotshift reads");
}

/// Storage as eframe's persistence sees it, in memory.
#[derive(Default)]
struct MemoryStorage(std::collections::HashMap<String, String>);

impl eframe::Storage for MemoryStorage {
    fn get_string(&self, key: &str) -> Option<String> {
        self.0.get(key).cloned()
    }
    fn set_string(&mut self, key: &str, value: String) {
        self.0.insert(key.to_owned(), value);
    }
    fn remove_string(&mut self, key: &str) {
        self.0.remove(key);
    }
    fn flush(&mut self) {}
}

#[test]
fn the_password_typed_in_the_database_form_is_never_persisted() {
    const PASSWORD: &str = "pw-typed-9f3a-never-stored";
    for in_database in [false, true] {
        let mut h = harness();
        fill_database_form(&mut h, "SELECT * FROM hub_measurements", in_database);
        // Typed into the masked field, as a user would.
        h.get_by_label("Password").focus();
        h.run_steps(1);
        h.get_by_label("Password").type_text(PASSWORD);
        h.run_steps(2);
        assert_eq!(h.state().db_form.password, PASSWORD);
        assert!(
            h.query_by_label_contains(PASSWORD).is_none(),
            "the field is masked"
        );
        h.state_mut()
            .apply(lotshift::gui::action::Action::RunDatabase);
        settle(&mut h);
        let state = h.state();
        assert!(state.messages.is_empty(), "{:?}", state.messages);
        assert!(state.result.is_current());
        // What eframe writes to the settings file when the window closes.
        let mut storage = MemoryStorage::default();
        eframe::App::save(h.state_mut(), &mut storage);
        let stored = storage
            .0
            .get(eframe::APP_KEY)
            .expect("the settings are saved");
        assert!(stored.contains("hub-lots.sqlite"), "the URL is remembered");
        assert!(!stored.contains(PASSWORD), "{stored}");
        let back: Saved = eframe::get_value(&storage, eframe::APP_KEY).unwrap();
        assert_eq!(back.recent_sources.len(), 1);
        assert!(!format!("{back:?}").contains(PASSWORD));
        assert!(!serde_json::to_string(&back).unwrap().contains(PASSWORD));
        // Nor in the record, a message or the confirmation line.
        let state = h.state();
        let record = state.result.shown().unwrap().record.to_json();
        assert!(!record.contains(PASSWORD));
        assert!(!state.notice.clone().unwrap_or_default().contains(PASSWORD));
        assert!(!format!("{:?}", state.db_form).contains(PASSWORD));
        // A new session fills the form from what was remembered, without a password.
        let mut app = LotshiftApp::new(None, back);
        app.apply(lotshift::gui::action::Action::UseRecentSource(0));
        assert_eq!(app.db_form.url, sample_database());
        assert_eq!(app.db_form.in_database, in_database);
        assert!(app.db_form.password.is_empty());
    }
}

/// A file dropped on the window, as the windowing layer hands it over.
#[derive(Debug)]
struct Dropped(std::path::PathBuf);

impl egui::DroppedFile for Dropped {
    fn path(&self) -> &std::path::Path {
        &self.0
    }
    fn bytes(&self) -> Result<Vec<u8>, String> {
        std::fs::read(&self.0).map_err(|e| e.to_string())
    }
}

/// Writes the sample candidate lot as a Parquet file (numbers as doubles, the rest as text),
/// with the Parquet crate the loader reads it with.
fn write_parquet_lot(path: &std::path::Path) {
    use parquet::basic::{ConvertedType, Repetition, Type as Physical};
    use parquet::data_type::{ByteArray, ByteArrayType, DoubleType};
    use parquet::file::properties::WriterProperties;
    use parquet::file::writer::SerializedFileWriter;
    use parquet::schema::types::Type;
    use std::sync::Arc;
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/sample-lots/candidate-route-b.csv"
    ))
    .unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let rows: Vec<Vec<&str>> = lines
        .filter(|l| !l.trim().is_empty())
        .map(|l| l.split(',').collect())
        .collect();
    let numeric: Vec<bool> = (0..header.len())
        .map(|k| rows.iter().all(|r| r[k].parse::<f64>().is_ok()))
        .collect();
    let fields = header
        .iter()
        .zip(&numeric)
        .map(|(h, &number)| {
            let b = Type::primitive_type_builder(
                h,
                if number {
                    Physical::DOUBLE
                } else {
                    Physical::BYTE_ARRAY
                },
            )
            .with_repetition(Repetition::REQUIRED);
            let b = if number {
                b
            } else {
                b.with_converted_type(ConvertedType::UTF8)
            };
            Arc::new(b.build().unwrap())
        })
        .collect();
    let schema = Arc::new(
        Type::group_type_builder("lot")
            .with_fields(fields)
            .build()
            .unwrap(),
    );
    let file = std::fs::File::create(path).unwrap();
    let props = Arc::new(WriterProperties::builder().build());
    let mut w = SerializedFileWriter::new(file, schema, props).unwrap();
    let mut group = w.next_row_group().unwrap();
    let mut k = 0;
    while let Some(mut col) = group.next_column().unwrap() {
        if numeric[k] {
            let v: Vec<f64> = rows.iter().map(|r| r[k].parse().unwrap()).collect();
            col.typed::<DoubleType>()
                .write_batch(&v, None, None)
                .unwrap();
        } else {
            let v: Vec<ByteArray> = rows.iter().map(|r| ByteArray::from(r[k])).collect();
            col.typed::<ByteArrayType>()
                .write_batch(&v, None, None)
                .unwrap();
        }
        col.close().unwrap();
        k += 1;
    }
    group.close().unwrap();
    w.close().unwrap();
}

#[test]
fn a_parquet_file_dropped_on_the_window_is_read_as_a_lot() {
    let dir = scratch("parquet-drop");
    let path = dir.join("candidate-route-b.parquet");
    write_parquet_lot(&path);
    let mut h = harness();
    let t2 = h.state().result.shown().unwrap().comparison.hotelling.t2;
    h.state_mut().lots.slots[1] = None;
    h.input_mut()
        .dropped_files
        .push(std::sync::Arc::new(Dropped(path.clone())));
    h.run_steps(1);
    settle(&mut h);
    let state = h.state();
    assert!(state.messages.is_empty(), "{:?}", state.messages);
    let lot = state.lots.slots[1].as_ref().unwrap();
    assert_eq!(lot.provenance.format, "parquet");
    assert_eq!(lot.len(), 40);
    assert!(state.result.is_current());
    // The same numbers as the CSV file give.
    let again = state.result.shown().unwrap().comparison.hotelling.t2;
    assert!(((again - t2) / t2).abs() < 1e-12, "{again} against {t2}");
    assert_eq!(
        state.saved.recent[0],
        path.display().to_string(),
        "in the recent files"
    );
    let _ = std::fs::remove_dir_all(dir);
}

#[test]
fn a_long_check_line_wraps_inside_the_window() {
    // The permutation line of the Verdict view is longer than the panel is wide: it wraps
    // instead of running off the window's right edge (1400 points here).
    let h = harness();
    let line = h.get_by_label_contains("relabellings reached the observed");
    let right = line.rect().max.x;
    assert!(right <= 1400.0, "the line ends at x = {right}");
}
