//! The window, driven headless through egui_kittest's accessibility tree: no display needed.

mod common;

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
        if !h.state().worker.busy() {
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
    assert!(h.state().shown_current);
    // T² of the sample lots as numpy computes it (make_fixtures.py, key sample_lots).
    let want = sample_t2();
    let t2 = h.state().shown.as_ref().unwrap().comparison.hotelling.t2;
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
    let t2_before = h.state().shown.as_ref().unwrap().comparison.hotelling.t2;
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
    assert_eq!(state.slots[1].as_ref().unwrap().name, "candidate-route-b");
    assert_eq!(
        state.shown.as_ref().unwrap().comparison.hotelling.t2,
        t2_before
    );
    assert!(state.shown_current);
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
    let c = &h.state().shown.as_ref().unwrap().comparison;
    assert_eq!(c.characteristics.len(), 4);
    assert!(!c.characteristics.iter().any(|n| n == "mass"));
    assert_eq!(c.hotelling.df1, 4.0);
}

#[test]
fn swapping_makes_the_candidate_the_reference() {
    let mut h = harness();
    let d = h.state().shown.as_ref().unwrap().comparison.intervals[2].difference;
    h.get_by_label("Swap lots").click();
    h.run_steps(1);
    settle(&mut h);
    let c = &h.state().shown.as_ref().unwrap().comparison;
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
    let record = h.state().shown.as_ref().unwrap().record.clone();
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
    h.run_steps(2);
    h.get_by_label_contains("signature valid — signed by Dana Whitfield");
    h.get_by_label_contains("every number matches the current result");
    // A tampered copy is reported as not verified.
    let bad = dir.join("bad.json");
    std::fs::write(&bad, summary.to_json().replacen("Dana", "Dan", 1)).unwrap();
    h.state_mut().check_summary(&bad);
    h.run_steps(2);
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
    let t2 = h.state().shown.as_ref().unwrap().comparison.hotelling.t2;
    assert_eq!(
        h.state().shown.as_ref().unwrap().comparison.characteristics,
        vec!["mass"]
    );
    h.get_by_label("mass (g)").click();
    h.run_steps(3);
    settle(&mut h);
    let state = h.state();
    assert_eq!(
        state.shown.as_ref().unwrap().comparison.hotelling.t2,
        t2,
        "previous result kept"
    );
    assert!(!state.shown_current, "marked as not current");
    assert!(
        state
            .run_error
            .as_deref()
            .unwrap_or_default()
            .contains("no characteristics"),
        "{:?}",
        state.run_error
    );
    h.get_by_label_contains("results shown are from a previous run");
    // Tick one back and cancel at once: the old result stays until a run finishes.
    h.get_by_label("mass (g)").click();
    h.run_steps(1);
    h.state_mut().worker.cancel();
    settle(&mut h);
    assert_eq!(
        h.state().shown.as_ref().unwrap().comparison.hotelling.t2,
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
        let c = &h.state().shown.as_ref().unwrap().comparison;
        assert_eq!(
            (c.lots[0].name.as_str(), c.lots[1].name.as_str()),
            ("A", "B")
        );
    }
    h.get_by_label_contains("Lots in both-routes.csv");
    // The split gives the same comparison as the two separate files (T² by numpy).
    let t2 = h.state().shown.as_ref().unwrap().comparison.hotelling.t2;
    let want = sample_t2();
    assert!(((t2 - want) / want).abs() < 1e-10, "{t2} against {want}");
    // Swapping swaps the lot values.
    h.get_by_label("Swap lots").click();
    h.run_steps(3);
    settle(&mut h);
    let c = &h.state().shown.as_ref().unwrap().comparison;
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
    let record = h.state().shown.as_ref().unwrap().record.clone();
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
    assert!(out.status.success(), "{text}");
    assert!(
        text.contains("every number in the record matches"),
        "{text}"
    );
    let _ = std::fs::remove_dir_all(dir);
}
