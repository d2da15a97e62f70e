//! Any text as a signed summary: verification must answer, never panic; canonicalization of
//! any JSON value must not panic either.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lotshift::report::{canonical_bytes, sign};

fuzz_target!(|bytes: &[u8]| {
    let Ok(text) = std::str::from_utf8(bytes) else {
        return;
    };
    let _ = sign::verify_signature(text, None);
    if let Ok(v) = serde_json::from_str::<serde_json::Value>(text) {
        let _ = canonical_bytes(&v);
        // The report renders typed records only (the command line refuses the rest).
        if let Ok(r) = serde_json::from_value::<lotshift::report::Record>(v.clone()) {
            let _ = lotshift::report::html::render_html(&r, None);
        }
    }
});
