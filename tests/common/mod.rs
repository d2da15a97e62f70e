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
