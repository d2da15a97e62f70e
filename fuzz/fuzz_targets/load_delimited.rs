//! Any bytes as a CSV/TSV lot file: the loader must return a lot or an error, never panic;
//! a loaded pair must compare or fail cleanly.
#![no_main]

use libfuzzer_sys::fuzz_target;
use lotshift::analysis::{self, LotData, Settings, Silent};
use lotshift::data::{self, LoadOptions, Selection};

fuzz_target!(|bytes: &[u8]| {
    let Ok(lot) = data::load_bytes("fuzz.csv", bytes, &LoadOptions::default()) else {
        return;
    };
    let Ok(p) = data::prepare(&lot, &lot, &Selection::default()) else {
        return;
    };
    let settings = Settings { permutations: 19, ..Settings::default() };
    let _ = analysis::compare(
        &p.characteristics,
        &p.units,
        [
            LotData { name: "a", data: &p.lots[0].data },
            LotData { name: "b", data: &p.lots[1].data },
        ],
        &settings,
        &Silent,
    );
});
