//! Helpers shared by the integration tests.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// A bundled sample lot file.
pub fn sample(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-lots")
        .join(name)
}

/// Characteristic names c0, c1, ... for synthetic lots.
pub fn names(p: usize) -> Vec<String> {
    (0..p).map(|k| format!("c{k}")).collect()
}

/// The committed numpy/scipy/mpmath fixtures (tests/fixtures/reference.json, written by
/// tests/fixtures/make_fixtures.py).
pub fn reference_fixtures() -> serde_json::Value {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/reference.json"
    ))
    .expect("fixture file");
    serde_json::from_str(&text).expect("fixture JSON")
}
