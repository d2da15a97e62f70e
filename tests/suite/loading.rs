//! Lot files: every dialect the loader accepts and every bad input it must refuse, with the
//! exact place (file, row as a spreadsheet shows it, column) in each error.

use crate::common;
use common::sample;

use lotshift::data::{
    self, ColumnData, LoadError, LoadErrorKind, LoadOptions, Lot, PrepareError, Selection, load,
    load_bytes, prepare, split_lot,
};
use std::path::Path;

fn read(name: &str, text: &[u8]) -> Result<Lot, LoadError> {
    load_bytes(name, text, &LoadOptions::default())
}

fn numbers(lot: &Lot, column: &str) -> Vec<f64> {
    match &lot.column(column).expect(column).data {
        ColumnData::Numeric(v) => v.clone(),
        ColumnData::Text(_) => panic!("{column} is text"),
    }
}

fn err(name: &str, text: &[u8]) -> LoadError {
    read(name, text).expect_err("should fail")
}

#[test]
fn comma_csv_roles_units_and_rows() {
    let lot = load(&sample("reference-route-a.csv"), &LoadOptions::default()).unwrap();
    assert_eq!(lot.provenance.delimiter, Some(','));
    assert!(!lot.provenance.decimal_comma);
    assert_eq!(lot.len(), 40);
    assert_eq!(lot.rows[0], 2, "first data row is spreadsheet row 2");
    let roles: Vec<(&str, bool)> = lot
        .columns
        .iter()
        .map(|c| (c.name.as_str(), c.is_numeric()))
        .collect();
    assert_eq!(
        roles,
        vec![
            ("serial", false),
            ("measured at", false),
            ("operator", false),
            ("bore diameter", true),
            ("outer diameter", true),
            ("hub length", true),
            ("flange thickness", true),
            ("mass", true),
        ]
    );
    assert_eq!(lot.column("mass").unwrap().unit.as_deref(), Some("g"));
    assert_eq!(lot.column("mass").unwrap().missing, 1);
    // SHA-256 of the bytes, checked against an independent implementation (sha256sum).
    assert_eq!(lot.provenance.sha256.len(), 64);
}

#[test]
fn semicolon_decimal_comma_crlf_reads_the_same_numbers() {
    let plain = load(&sample("candidate-route-b.csv"), &LoadOptions::default()).unwrap();
    let euro = load(
        &sample("candidate-route-b-semicolon.csv"),
        &LoadOptions::default(),
    )
    .unwrap();
    assert_eq!(euro.provenance.delimiter, Some(';'));
    assert!(euro.provenance.decimal_comma);
    for c in [
        "bore diameter",
        "outer diameter",
        "hub length",
        "flange thickness",
        "mass",
    ] {
        assert_eq!(numbers(&plain, c), numbers(&euro, c), "{c}");
    }
}

#[test]
fn xlsx_reads_the_same_numbers_and_names_sheets() {
    let plain = load(&sample("candidate-route-b.csv"), &LoadOptions::default()).unwrap();
    let book = load(&sample("candidate-route-b.xlsx"), &LoadOptions::default()).unwrap();
    assert_eq!(book.provenance.sheet.as_deref(), Some("hubs"));
    assert_eq!(book.rows[0], 2);
    for c in ["bore diameter", "hub length", "mass"] {
        assert_eq!(numbers(&plain, c), numbers(&book, c), "{c}");
    }
    let named = load(
        &sample("candidate-route-b.xlsx"),
        &LoadOptions {
            sheet: Some("HUBS".into()),
            ..Default::default()
        },
    )
    .unwrap();
    assert_eq!(named.len(), 40);
    let e = load(
        &sample("candidate-route-b.xlsx"),
        &LoadOptions {
            sheet: Some("lot 7".into()),
            ..Default::default()
        },
    )
    .unwrap_err();
    assert_eq!(
        e.kind,
        LoadErrorKind::NoSuchSheet {
            sheet: "lot 7".into(),
            available: vec!["hubs".into()]
        }
    );
}

#[test]
fn utf8_bom_tabs_quotes_and_decimal_comma_in_tsv() {
    let text = "\u{feff}part\tlength [mm]\twidth [mm]\r\n\"A\t1\"\t1,5\t2,25\r\n\"B \"\"x\"\"\"\t1,75\t2,5\r\n";
    let lot = read("t.tsv", text.as_bytes()).unwrap();
    assert_eq!(lot.provenance.delimiter, Some('\t'));
    assert!(lot.provenance.decimal_comma);
    assert_eq!(numbers(&lot, "length"), vec![1.5, 1.75]);
    assert_eq!(lot.column("length").unwrap().unit.as_deref(), Some("mm"));
    match &lot.column("part").unwrap().data {
        ColumnData::Text(t) => {
            assert_eq!(t.get(0), "A\t1");
            assert_eq!(t.get(1), "B \"x\"");
        }
        ColumnData::Numeric(_) => panic!("part should be a label"),
    }
}

#[test]
fn quoted_commas_and_missing_tokens() {
    let text = b"operator,a,b\n\"Smith, J.\",1,2\nLee,,3\nLee,NA,4\nLee,NaN,5\nLee,-,6\nLee,#N/A,7\nLee,8,9\n";
    let lot = read("m.csv", text).unwrap();
    assert_eq!(lot.column("a").unwrap().missing, 5);
    let a = numbers(&lot, "a");
    assert_eq!(a.iter().filter(|v| v.is_nan()).count(), 5);
    assert_eq!(lot.column("operator").unwrap().text(0), "Smith, J.");
}

#[test]
fn latin1_headers_are_read() {
    let mut bytes = b"Rauheit (\xb5m),b\n".to_vec();
    bytes.extend_from_slice(b"1.5,2\n2.5,3\n");
    let lot = read("l.csv", &bytes).unwrap();
    assert_eq!(lot.provenance.encoding.as_deref(), Some("Latin-1"));
    assert_eq!(lot.columns[0].unit.as_deref(), Some("µm"));
}

#[test]
fn non_numeric_cell_names_file_row_column_and_text() {
    let e = err("lots/a.csv", b"x,y\n1,2\n3,4.4.4\n4,5\n");
    assert_eq!(e.file, "lots/a.csv");
    assert_eq!(e.row, Some(3));
    assert_eq!(e.column.as_deref(), Some("y"));
    assert_eq!(e.position, Some(1));
    assert_eq!(
        e.kind,
        LoadErrorKind::NotNumeric {
            text: "4.4.4".into()
        }
    );
    let msg = e.to_string();
    assert!(msg.contains("lots/a.csv, row 3, column B \"y\""), "{msg}");
}

#[test]
fn infinite_values_are_refused() {
    let e = err("a.csv", b"x\n1\ninf\n2\n");
    assert_eq!((e.row, e.position), (Some(3), Some(0)));
    assert_eq!(e.kind, LoadErrorKind::NotFinite { text: "inf".into() });
    let e = err("a.csv", b"x\n1\n1e999\n2\n");
    assert_eq!(
        e.kind,
        LoadErrorKind::NotFinite {
            text: "1e999".into()
        }
    );
}

#[test]
fn empty_header_only_ragged_duplicate_binary_utf16() {
    assert_eq!(err("e.csv", b"").kind, LoadErrorKind::Empty);
    assert_eq!(err("e.csv", b"  \n\n").kind, LoadErrorKind::Empty);
    let e = err("h.csv", b"a,b,c\n");
    assert_eq!(
        (e.kind.clone(), e.row),
        (LoadErrorKind::HeaderOnly, Some(1))
    );
    let e = err("r.csv", b"a,b,c\n1,2,3\n4,5\n");
    assert_eq!(e.row, Some(3));
    assert_eq!(
        e.kind,
        LoadErrorKind::Ragged {
            found: 2,
            expected: 3
        }
    );
    let e = err("r.csv", b"a,b\n1,2\n4,5,6\n");
    assert_eq!(
        e.kind,
        LoadErrorKind::Ragged {
            found: 3,
            expected: 2
        }
    );
    let e = err("d.csv", b"Bore (mm),x, bore \n1,2,3\n");
    assert_eq!(
        (e.row, e.position, e.column.as_deref()),
        (Some(1), Some(2), Some("bore"))
    );
    assert_eq!(
        e.kind,
        LoadErrorKind::DuplicateColumn {
            first: "column A \"Bore (mm)\"".into()
        }
    );
    assert_eq!(
        err("b.csv", b"\x00\x01\x02garbage\xff").kind,
        LoadErrorKind::Binary
    );
    // UTF-16 is decoded; a lone surrogate is not valid UTF-16.
    assert_eq!(
        err("u.csv", b"\xff\xfea\x00,\x00b\x00").kind,
        LoadErrorKind::HeaderOnly
    );
    assert!(matches!(
        err("u.csv", b"\xff\xfe\x00\xd8a\x00").kind,
        LoadErrorKind::Encoding(_)
    ));
}

#[test]
fn trailing_empty_fields_are_tolerated() {
    let lot = read("t.csv", b"a,b,\n1,2,\n3,4,\n").unwrap();
    assert_eq!(lot.columns.len(), 2);
    assert_eq!(numbers(&lot, "b"), vec![2.0, 4.0]);
}

#[test]
fn unreadable_path_is_an_io_error_naming_the_file() {
    let e = load(Path::new("/nonexistent/lot.csv"), &LoadOptions::default()).unwrap_err();
    assert_eq!(e.file, "/nonexistent/lot.csv");
    assert!(matches!(e.kind, LoadErrorKind::Io(_)));
}

#[test]
fn forced_labels_keep_numeric_serials_out_of_the_analysis() {
    let text = b"serial,x\n1001,1.5\n1002,2.5\n1003,2.0\n";
    let lot = load_bytes(
        "s.csv",
        text,
        &LoadOptions {
            labels: vec!["Serial".into()],
            ..Default::default()
        },
    )
    .unwrap();
    assert!(!lot.column("serial").unwrap().is_numeric());
}

#[test]
fn one_file_split_by_lot_column_equals_two_files() {
    let [a, b] = data::load_two(
        &[sample("both-routes.csv")],
        Some("route"),
        None,
        &LoadOptions::default(),
    )
    .unwrap();
    assert_eq!((a.name.as_str(), b.name.as_str()), ("A", "B"));
    let ref_a = load(&sample("reference-route-a.csv"), &LoadOptions::default()).unwrap();
    assert_eq!(numbers(&a, "hub length"), numbers(&ref_a, "hub length"));
    assert_eq!(a.rows[0], 2);
    assert_eq!(b.rows[0], 42, "rows keep their place in the combined file");
    assert_eq!(a.provenance.split, Some(("route".into(), "A".into())));
    // Chosen order reverses the lots.
    let [x, y] = data::load_two(
        &[sample("both-routes.csv")],
        Some("ROUTE"),
        Some(["b", "a"]),
        &LoadOptions::default(),
    )
    .unwrap();
    assert_eq!((x.name.as_str(), y.name.as_str()), ("B", "A"));
}

#[test]
fn lot_column_with_one_or_three_values() {
    let one = read("one.csv", b"lot,x\nA,1\nA,2\n").unwrap();
    let e = split_lot(&one, "lot", None).unwrap_err();
    assert!(
        matches!(&e.kind, LoadErrorKind::LotValues { values, .. } if values == &vec!["A".to_string()])
    );
    let three = read("three.csv", b"lot,x\nA,1\nB,2\nC,3\nA,4\n").unwrap();
    let e = split_lot(&three, "lot", None).unwrap_err();
    assert!(e.to_string().contains("more than two lots"), "{e}");
    let [a, c] = split_lot(&three, "lot", Some(["A", "C"])).unwrap();
    assert_eq!((a.len(), c.len()), (2, 1));
    let e = split_lot(&three, "lot", Some(["A", "D"])).unwrap_err();
    assert!(e.to_string().contains("no value \"D\""), "{e}");
    let e = split_lot(&three, "batch", None).unwrap_err();
    assert!(matches!(e.kind, LoadErrorKind::NoLotColumn { .. }));
}

#[test]
fn matching_ignores_case_spaces_and_order_and_reports_unmatched() {
    let a = read("a.csv", b"Bore Dia (mm),len,only_a\n1,2,3\n2,3,4\n3,5,5\n").unwrap();
    let b = read("b.csv", b"LEN,bore dia [mm],only_b\n2,1,0\n3,3,1\n4,2,7\n").unwrap();
    let p = prepare(&a, &b, &Selection::default()).unwrap();
    assert_eq!(
        p.characteristics,
        vec!["Bore Dia".to_string(), "len".to_string()]
    );
    // Candidate columns are reordered to match.
    assert_eq!(p.lots[1].data[(0, 0)], 1.0);
    assert_eq!(p.lots[1].data[(0, 1)], 2.0);
    let unmatched: Vec<(usize, &str)> = p
        .unmatched
        .iter()
        .map(|u| (u.lot, u.column.as_str()))
        .collect();
    assert_eq!(unmatched, vec![(0, "only_a"), (1, "only_b")]);
}

#[test]
fn listwise_exclusion_counts_per_lot() {
    let a = read("a.csv", b"x,y\n1,2\n,3\n4,NA\n5,6\n7,8\n").unwrap();
    let b = read("b.csv", b"x,y\n1,2\n3,4\n5,7\n").unwrap();
    let p = prepare(&a, &b, &Selection::default()).unwrap();
    assert_eq!((p.lots[0].n_read, p.lots[0].n_excluded), (5, 2));
    assert_eq!(p.lots[0].missing, vec![1, 1]);
    assert_eq!(p.lots[0].data.nrows(), 3);
    assert_eq!(p.lots[0].kept, vec![0, 3, 4]);
}

#[test]
fn no_common_column_unknown_characteristic_unit_mismatch() {
    let a = read("a.csv", b"x,y\n1,2\n2,3\n").unwrap();
    let b = read("b.csv", b"u,v\n1,2\n2,3\n").unwrap();
    assert_eq!(
        prepare(&a, &b, &Selection::default()).unwrap_err(),
        PrepareError::NoCommonColumns("a.csv".into(), "b.csv".into())
    );
    let sel = Selection {
        only: Some(vec!["z".into()]),
        exclude: vec![],
    };
    let e = prepare(&a, &a, &sel).unwrap_err();
    assert!(matches!(e, PrepareError::UnknownCharacteristic { ref name, .. } if name == "z"));
    let mm = read("mm.csv", b"d (mm),e\n1,2\n2,3\n").unwrap();
    let inch = read("in.csv", b"d (in),e\n1,2\n2,3\n").unwrap();
    assert!(matches!(
        prepare(&mm, &inch, &Selection::default()).unwrap_err(),
        PrepareError::UnitMismatch { .. }
    ));
}

#[test]
fn explicit_characteristics_keep_the_order_given() {
    let a = read("a.csv", b"x,y,z\n1,2,3\n2,3,5\n4,1,2\n").unwrap();
    let sel = Selection {
        only: Some(vec!["Z".into(), "x".into()]),
        exclude: vec![],
    };
    let p = prepare(&a, &a, &sel).unwrap();
    assert_eq!(p.characteristics, vec!["z".to_string(), "x".to_string()]);
}

#[test]
fn a_file_read_in_chunks_equals_the_same_bytes_in_memory() {
    // Lines cross the 1 MiB chunk boundaries; CRLF line ends, a BOM, a blank line, and a last
    // line without a line end.
    let mut text = String::from("\u{feff}serial,x (mm),y (mm)\r\n");
    for i in 0..120_000 {
        text.push_str(&format!(
            "S{i},{}.{:03},{}\r\n",
            i % 97,
            i % 1000,
            (i * 7) % 1013
        ));
        if i == 50_000 {
            text.push_str("\r\n");
        }
    }
    text.push_str("last,1.5,2.5");
    let dir = std::env::temp_dir().join(format!("lotshift-chunks-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("chunks.csv");
    std::fs::write(&path, &text).unwrap();
    let from_file = load(&path, &LoadOptions::default()).unwrap();
    let from_memory = load_bytes(
        &path.display().to_string(),
        text.as_bytes(),
        &LoadOptions::default(),
    )
    .unwrap();
    assert_eq!(from_file, from_memory);
    assert_eq!(from_file.len(), 120_001);
    assert_eq!(
        *from_file.rows.last().unwrap(),
        120_003,
        "the blank line keeps its row number"
    );
    assert_eq!(numbers(&from_file, "x").last(), Some(&1.5));
    // A quoted file takes the csv path; the result is the same as in memory too.
    let quoted = text.replacen("S7,", "\"S,7\",", 1);
    std::fs::write(&path, &quoted).unwrap();
    let from_file = load(&path, &LoadOptions::default()).unwrap();
    let from_memory = load_bytes(
        &path.display().to_string(),
        quoted.as_bytes(),
        &LoadOptions::default(),
    )
    .unwrap();
    assert_eq!(from_file, from_memory);
    std::fs::remove_dir_all(dir).unwrap();
}

/// Asking for no file (or three) is a usage error in plain words, not an I/O error of a file
/// with no name.
#[test]
fn a_wrong_number_of_files_is_a_usage_error() {
    let e = lotshift::data::load_two(&[], None, None, &lotshift::data::LoadOptions::default())
        .unwrap_err();
    assert!(
        matches!(e.kind, lotshift::data::LoadErrorKind::Usage(_)),
        "{e:?}"
    );
    assert_eq!(
        e.to_string(),
        "give two lot files, or one file and a lot column"
    );
}

/// The one-pass line reader (quote-free text) against the csv crate's path (the same text
/// with one quoted label): every number, missing count, text cell and row number equal, on
/// lines that leave the one-pass form in every way it can be left (missing tokens, empty
/// cells, exponents, spaces, a leading plus, more than 15 digits, a blank line, CRLF, a last
/// line without a line end, a trailing empty field).
#[test]
fn the_one_pass_reader_equals_the_general_rules_line_for_line() {
    let body = "serial,x (mm),y (mm),note\r\n\
                S1,1.5,2.25,ok\r\n\
                S2,NA,3,\r\n\
                S3,,4.5,late\r\n\
                S4,1e-3,-0.5,ok\r\n\
                S5, 7.25 ,+8,spaced\r\n\
                S6,1.23456789012345678,0.1,long\r\n\
                \r\n\
                S7,-.5,5.,ok\r\n\
                S8,2,3,ok,\r\n\
                S9,1234567.891,-0.000001,last";
    let plain = read("plain.csv", body.as_bytes()).unwrap();
    let quoted_text = body.replacen("S1,", "\"S1\",", 1);
    let quoted = read("plain.csv", quoted_text.as_bytes()).unwrap();
    // Compared as printed: a missing cell is NaN, which is not equal to itself.
    assert_eq!(
        format!("{:?}", plain.columns),
        format!("{:?}", quoted.columns)
    );
    assert_eq!(plain.rows, quoted.rows);
    assert_eq!(plain.rows, vec![2, 3, 4, 5, 6, 7, 9, 10, 11]);
    let x = numbers(&plain, "x");
    // Against the standard library's parser (the reference for every decimal form).
    assert_eq!(x[0], 1.5);
    assert!(x[1].is_nan() && x[2].is_nan());
    assert_eq!(x[3], "1e-3".parse::<f64>().unwrap());
    assert_eq!(x[4], 7.25);
    assert_eq!(x[5], "1.23456789012345678".parse::<f64>().unwrap());
    assert_eq!(x[6], -0.5);
    assert_eq!(x[8], "1234567.891".parse::<f64>().unwrap());
    assert_eq!(numbers(&plain, "y")[7], 3.0);
    // Errors name the same row and column either way.
    for bad in ["S1,1.5,abc,x", "S1,1.5,inf,x", "S1,1.5\r"] {
        let text = format!("serial,x (mm),y (mm),note\r\nS0,1,2,a\r\nS0,1,2,a\r\n{bad}\r\n");
        let a = err("bad.csv", text.as_bytes()).to_string();
        let b = err("bad.csv", text.replacen("S1", "\"S1\"", 1).as_bytes()).to_string();
        assert_eq!(a, b);
        assert!(a.contains("row 4"), "{a}");
    }
}

/// Plain decimals of every length up to 15 digits, read by the one-pass reader, equal the
/// standard library's correctly rounded parse bit for bit (Clinger 1990: an integer below
/// 2⁵³ divided by an exact power of ten is one correctly rounded operation).
#[test]
fn plain_decimals_equal_the_standard_parser_bit_for_bit() {
    let mut state = 0x2545_F491_4F6C_DD1Du64;
    let mut text = String::from("x,y\n");
    let mut want = Vec::new();
    for i in 0..20_000u64 {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        let digits = 1 + (state % 15) as usize;
        let mantissa = (state >> 8) % 10u64.pow(digits as u32);
        let frac = (state >> 4) as usize % (digits + 1);
        let s = format!("{mantissa:0digits$}");
        let cell = format!(
            "{}{}.{}",
            if i % 3 == 0 { "-" } else { "" },
            &s[..digits - frac],
            &s[digits - frac..]
        );
        want.push(cell.parse::<f64>().unwrap());
        text.push_str(&format!("{cell},{i}\n"));
    }
    let lot = read("decimals.csv", text.as_bytes()).unwrap();
    let got = numbers(&lot, "x");
    assert_eq!(got.len(), want.len());
    for (g, w) in got.iter().zip(&want) {
        assert_eq!(g.to_bits(), w.to_bits(), "{g} vs {w}");
    }
}

/// A file read in one pass (hash and checks block by block) equals the same bytes read from
/// memory, hash included, also when what makes the one-pass reader give way (a quoted cell,
/// a byte that is not UTF-8, a lone carriage return) comes only after the first megabyte.
#[test]
fn the_one_pass_file_reader_gives_way_late_and_reads_the_same() {
    let mut text = String::from("serial,x (mm),y (mm),note\n");
    for i in 0..150_000 {
        text.push_str(&format!(
            "S{i},{}.{:03},{},n{}\n",
            i % 97,
            i % 1000,
            i % 13,
            i % 7
        ));
    }
    let late = text.len() - 200;
    let dir = std::env::temp_dir().join(format!("lotshift-one-pass-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("late.csv");
    let mut cases: Vec<Vec<u8>> = vec![text.clone().into_bytes()];
    let mut quoted = text.clone().into_bytes();
    let at = late + quoted[late..].iter().position(|&b| b == b'n').unwrap();
    quoted.splice(at..at + 1, b"\"n,\"".iter().copied());
    cases.push(quoted);
    let mut latin1 = text.clone().into_bytes();
    latin1[at] = 0xE9;
    cases.push(latin1);
    let mut lone_cr = text.clone().into_bytes();
    lone_cr[at] = b'\r';
    cases.push(lone_cr);
    for bytes in cases {
        std::fs::write(&path, &bytes).unwrap();
        let from_file = load(&path, &LoadOptions::default());
        let from_memory = load_bytes(&path.display().to_string(), &bytes, &LoadOptions::default());
        assert_eq!(
            format!("{from_file:?}"),
            format!("{from_memory:?}"),
            "file and memory differ"
        );
        if let Ok(lot) = from_file {
            assert_eq!(lot.len(), 150_000);
        }
    }
    std::fs::remove_dir_all(dir).unwrap();
}
