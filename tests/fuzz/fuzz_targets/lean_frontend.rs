//! libFuzzer target: `checks::lean_frontend` on every input (see `../checks.rs` for what it checks).
#![no_main]

#[allow(dead_code)]
#[path = "../checks.rs"]
mod checks;

libfuzzer_sys::fuzz_target!(|data: &[u8]| checks::lean_frontend(data));
