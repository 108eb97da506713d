//! Any text as a step (`NAME:PARAM=VALUE,…`); steps that parse run on a small image.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        pumice::fuzzing::step(text);
    }
});
