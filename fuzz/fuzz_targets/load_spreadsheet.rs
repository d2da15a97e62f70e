//! Any bytes as a spreadsheet (XLSX/XLS/ODS): an error or a lot, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lotshift::data::{self, LoadOptions};

fuzz_target!(|bytes: &[u8]| {
    for name in ["fuzz.xlsx", "fuzz.xls", "fuzz.ods"] {
        let _ = data::load_bytes(name, bytes, &LoadOptions::default());
    }
});
