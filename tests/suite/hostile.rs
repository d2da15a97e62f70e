//! Hostile input: the corpus in tests/corpus (made by make_corpus.py) and generated extremes.
//! Each case must give a clear error naming the place, or a correct result; never a panic, a
//! hang or a silently wrong number. The README's robustness table lists the same cases.

use std::path::{Path, PathBuf};

use lotshift::analysis::{self, Comparison, LotData, Settings, Silent};
use lotshift::data::{
    self, ColumnData, LoadError, LoadErrorKind, LoadOptions, Lot, Selection, load, load_bytes,
    prepare, split_lot,
};
use lotshift::stats::EngineError;
use nalgebra::DMatrix;

fn corpus(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/corpus")
        .join(name)
}

fn open(name: &str) -> Result<Lot, LoadError> {
    load(&corpus(name), &LoadOptions::default())
}

fn settings() -> Settings {
    Settings {
        permutations: 99,
        ..Settings::default()
    }
}

/// Compares a lot with itself (or with `other`): the shortest way to reach the engine.
fn compare_files(a: &Lot, b: &Lot) -> Result<Comparison, String> {
    let p = prepare(a, b, &Selection::default()).map_err(|e| e.to_string())?;
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
        &settings(),
        &Silent,
    )
    .map_err(|e| e.to_string())
}

fn engine(x: &DMatrix<f64>, y: &DMatrix<f64>) -> Result<Comparison, EngineError> {
    let p = x.ncols();
    let names: Vec<String> = (0..p).map(|k| format!("c{k}")).collect();
    analysis::compare(
        &names,
        &vec![None; p],
        [
            LotData { name: "a", data: x },
            LotData { name: "b", data: y },
        ],
        &settings(),
        &Silent,
    )
}

fn numbers(lot: &Lot, column: &str) -> Vec<f64> {
    match &lot.column(column).expect(column).data {
        ColumnData::Numeric(v) => v.clone(),
        ColumnData::Text(_) => panic!("{column} is text"),
    }
}

#[test]
fn empty_header_only_ragged_duplicate_binary() {
    assert_eq!(open("empty.csv").unwrap_err().kind, LoadErrorKind::Empty);
    let e = open("header-only.csv").unwrap_err();
    assert_eq!((e.kind, e.row), (LoadErrorKind::HeaderOnly, Some(1)));
    let e = open("ragged.csv").unwrap_err();
    assert_eq!(
        (e.kind, e.row),
        (
            LoadErrorKind::Ragged {
                found: 2,
                expected: 3
            },
            Some(3)
        )
    );
    let e = open("duplicate-columns.csv").unwrap_err();
    assert_eq!(
        (e.row, e.position, e.column.as_deref()),
        (Some(1), Some(2), Some("bore"))
    );
    assert_eq!(open("binary.bin").unwrap_err().kind, LoadErrorKind::Binary);
    // Mixed delimiters: the comma wins, and the semicolon row is ragged.
    let e = open("mixed-delimiters.csv").unwrap_err();
    assert_eq!(
        (e.kind, e.row),
        (
            LoadErrorKind::Ragged {
                found: 1,
                expected: 3
            },
            Some(3)
        )
    );
}

#[test]
fn one_data_row_and_too_few_units_are_engine_errors() {
    let one = open("one-row.csv").unwrap();
    assert_eq!(one.len(), 1);
    let e = compare_files(&one, &one).unwrap_err();
    assert!(e.contains("too few units for 2 characteristics"), "{e}");
    let few = open("too-few-units.csv").unwrap();
    let e = compare_files(&few, &few).unwrap_err();
    assert!(e.contains("n1 + n2 - 2 >= 5"), "{e}");
}

#[test]
fn all_missing_constant_and_collinear_columns() {
    let lot = open("all-missing-column.csv").unwrap();
    let p = prepare(&lot, &lot, &Selection::default()).unwrap();
    assert_eq!(p.characteristics, vec!["x", "y"]);
    assert!(
        p.unmatched
            .iter()
            .any(|u| u.column == "z" && u.why == "every cell is missing")
    );
    assert!(compare_files(&lot, &lot).is_ok());
    let lot = open("constant.csv").unwrap();
    let e = compare_files(&lot, &lot).unwrap_err();
    assert!(e.contains("\"gauge\" does not vary"), "{e}");
    let lot = open("collinear.csv").unwrap();
    let e = compare_files(&lot, &lot).unwrap_err();
    assert!(
        e.contains("collinear")
            && e.contains("\"x_plus_y\"")
            && e.contains("\"x\"")
            && e.contains("\"y\""),
        "{e}"
    );
}

#[test]
fn utf16_and_latin1_text_are_read() {
    let lot = open("utf16.csv").unwrap();
    assert_eq!(numbers(&lot, "x"), vec![1.5, 1.7, 1.2]);
    assert!(lot.provenance.notes.iter().any(|n| n.contains("UTF-16")));
    let lot = open("latin1.csv").unwrap();
    assert_eq!(lot.provenance.encoding.as_deref(), Some("Latin-1"));
    assert_eq!(lot.columns[0].unit.as_deref(), Some("µm"));
    assert_eq!(numbers(&lot, "Rauheit"), vec![1.5, 1.7, 1.2]);
}

#[test]
fn inf_nan_huge_and_subnormal_values() {
    let e = open("special-inf.csv").unwrap_err();
    assert_eq!((e.row, e.position), (Some(3), Some(0)));
    assert_eq!(e.kind, LoadErrorKind::NotFinite { text: "inf".into() });
    let lot = open("special-nan.csv").unwrap();
    let p = prepare(&lot, &lot, &Selection::default()).unwrap();
    assert_eq!(p.lots[0].n_excluded, 1, "NaN is a missing cell");
    // Values near 1e307: their squares overflow, so the engine refuses rather than report inf.
    let lot = open("special-huge.csv").unwrap();
    let e = compare_files(&lot, &lot).unwrap_err();
    assert!(e.contains("\"x\" has values too large"), "{e}");
    // Subnormal values: their squares vanish, so the engine refuses rather than call x constant.
    let lot = open("special-subnormal.csv").unwrap();
    let e = compare_files(&lot, &lot).unwrap_err();
    assert!(e.contains("spread of \"x\" is too small"), "{e}");
}

#[test]
fn a_spreadsheet_with_an_empty_first_sheet_merged_cells_formulas_and_dates() {
    let lot = open("hostile.xlsx").unwrap();
    assert_eq!(lot.provenance.sheet.as_deref(), Some("Data"));
    assert!(
        lot.provenance
            .notes
            .iter()
            .any(|n| n.contains("\"Empty\" is empty"))
    );
    assert_eq!(lot.len(), 8);
    assert_eq!(lot.rows[0], 2);
    assert!(
        !lot.column("operator").unwrap().is_numeric(),
        "merged label cells stay labels"
    );
    assert!(
        !lot.column("measured at").unwrap().is_numeric(),
        "dates are labels"
    );
    // Formula cells are read through their cached values.
    let x = numbers(&lot, "x");
    let twice = numbers(&lot, "twice x");
    for (a, b) in x.iter().zip(&twice) {
        assert!((2.0 * a - b).abs() < 1e-9);
    }
    assert!(
        compare_files(&lot, &lot).is_err(),
        "twice x is collinear with x"
    );
}

#[test]
fn lot_columns_with_one_or_three_values() {
    let lot = open("lot-one-value.csv").unwrap();
    let e = split_lot(&lot, "lot", None).unwrap_err();
    assert!(e.to_string().contains("only one lot"), "{e}");
    let lot = open("lot-three-values.csv").unwrap();
    let e = split_lot(&lot, "lot", None).unwrap_err();
    assert!(e.to_string().contains("choose two"), "{e}");
    let [a, c] = split_lot(&lot, "lot", Some(["A", "C"])).unwrap();
    assert!(compare_files(&a, &c).is_ok());
}

#[test]
fn a_100_mb_single_line_is_refused_as_a_header() {
    let line = vec![b'a'; 100 * 1024 * 1024];
    let e = load_bytes("long.csv", &line, &LoadOptions::default()).unwrap_err();
    assert_eq!(
        e.kind,
        LoadErrorKind::HeaderTooLong {
            length: 100 * 1024 * 1024
        }
    );
    assert_eq!((e.row, e.position), (Some(1), Some(0)));
}

#[test]
fn ten_thousand_columns_load_and_fail_cleanly() {
    let p = 10_000;
    let mut text = (0..p)
        .map(|k| format!("c{k}"))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for i in 0..30 {
        let row: Vec<String> = (0..p)
            .map(|k| format!("{}", (i * 7919 + k * 104_729) % 1000))
            .collect();
        text.push_str(&row.join(","));
        text.push('\n');
    }
    let lot = load_bytes("wide.csv", text.as_bytes(), &LoadOptions::default()).unwrap();
    assert_eq!(lot.columns.len(), p);
    let e = compare_files(&lot, &lot).unwrap_err();
    assert!(e.contains("too few units for 10000 characteristics"), "{e}");
}

/// Seeded normal numbers.
fn normals(n: usize, p: usize, seed: u64) -> DMatrix<f64> {
    let mut rng = lotshift::stats::permutation::SplitMix64(seed);
    let mut u = || ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    DMatrix::from_fn(n, p, |_, _| {
        let (a, b) = (u(), u());
        (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
    })
}

#[test]
fn values_near_1e9_agree_with_the_same_data_near_zero() {
    // Numeric stress: 1e9 ± 1e-3, quantized to 2^-20 so both copies are exact; the results
    // must agree to 1e-9 relative.
    let q = |v: f64| (v * 1_048_576.0).round() / 1_048_576.0;
    let x = normals(40, 3, 1).map(|v| q(1e-3 * v));
    let y = normals(35, 3, 2).map(|v| q(1e-3 * v + 4e-4));
    let near = engine(&x, &y).unwrap();
    let far = engine(&x.map(|v| v + 1e9), &y.map(|v| v + 1e9)).unwrap();
    let rel = |a: f64, b: f64| (a - b).abs() / b.abs();
    assert!(rel(far.hotelling.t2, near.hotelling.t2) < 1e-9);
    assert!(rel(far.hotelling.p_value, near.hotelling.p_value) < 1e-9);
    for k in 0..3 {
        assert!(rel(far.intervals[k].difference, near.intervals[k].difference) < 1e-9);
        assert!(
            rel(
                far.discriminant.standardized[k],
                near.discriminant.standardized[k]
            ) < 1e-8
        );
    }
    assert_eq!(
        far.box_m.unwrap().m.to_bits() != 0,
        near.box_m.unwrap().m.to_bits() != 0
    );
}

#[test]
fn near_collinear_up_to_1e12_warns_and_names_them() {
    let mut x = normals(60, 3, 3);
    let mut y = normals(60, 3, 4);
    let noise_x = normals(60, 1, 5);
    let noise_y = normals(60, 1, 6);
    for (m, noise) in [(&mut x, &noise_x), (&mut y, &noise_y)] {
        for i in 0..60 {
            m[(i, 2)] = m[(i, 0)] - m[(i, 1)] + 2e-6 * noise[(i, 0)];
        }
    }
    let c = engine(&x, &y).unwrap();
    assert!(
        c.condition_number > 1e10 && c.condition_number < 1e13,
        "{}",
        c.condition_number
    );
    let w = &c.warnings[0];
    assert!(
        w.contains("\"c0\"") && w.contains("\"c1\"") && w.contains("\"c2\""),
        "{w}"
    );
}

#[test]
fn one_and_forty_characteristics_and_very_unequal_lots() {
    let c = engine(&normals(12, 1, 7), &normals(9, 1, 8)).unwrap();
    assert!(c.hotelling.t2.is_finite());
    let c = engine(&normals(100, 40, 9), &normals(90, 40, 10)).unwrap();
    assert_eq!(c.hotelling.df1, 40.0);
    assert!(c.hotelling.p_value > 0.0 && c.hotelling.p_value <= 1.0);
    let c = engine(&normals(3, 2, 11), &normals(100_000, 2, 12)).unwrap();
    assert_eq!(c.hotelling.df2, 100_000.0);
    assert!(c.discriminant.leave_one_out_rate.is_some());
}

#[test]
fn fuzz_regressions_never_panic() {
    // Inputs that once crashed a fuzz target (fuzz/), kept so the normal suite replays them.
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/corpus/fuzz-regressions");
    let Ok(entries) = std::fs::read_dir(&dir) else {
        return;
    };
    for entry in entries.flatten() {
        let bytes = std::fs::read(entry.path()).unwrap();
        for name in ["x.csv", "x.xlsx", "x.xls", "x.ods"] {
            if let Ok(lot) = load_bytes(name, &bytes, &LoadOptions::default()) {
                let _ = compare_files(&lot, &lot);
            }
        }
        if let Ok(text) = std::str::from_utf8(&bytes) {
            let _ = lotshift::report::sign::verify_signature(text, None);
            if let Ok(v) = serde_json::from_str::<serde_json::Value>(text) {
                let _ = lotshift::report::canonical_bytes(&v);
                // The report renders typed records only (the command line refuses the rest).
                use lotshift::report::{Record, html::render_html, sign::SignatureBlock};
                if let Ok(r) = serde_json::from_value::<Record>(v.clone()) {
                    let _ = render_html(&r, None);
                }
                if let (Ok(r), Ok(s)) = (
                    serde_json::from_value::<Record>(v["record"].clone()),
                    serde_json::from_value::<SignatureBlock>(v["signature"].clone()),
                ) {
                    let _ = render_html(&r, Some(&s));
                }
            }
        }
    }
    let _ = data::match_key("");
}
