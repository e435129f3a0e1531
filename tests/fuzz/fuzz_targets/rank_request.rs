//! libFuzzer target: `checks::rank_request` on every input, against the bundled demo
//! library (`index_fixtures/`), read once.
#![no_main]

use std::path::Path;
use std::sync::OnceLock;

#[allow(dead_code)]
#[path = "../checks.rs"]
mod checks;

static LIBRARY: OnceLock<quarry::library::Library> = OnceLock::new();

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let library = LIBRARY.get_or_init(|| {
        checks::fixture_library(&Path::new(env!("CARGO_MANIFEST_DIR")).join("../../index_fixtures"))
    });
    checks::rank_request(library, data)
});
