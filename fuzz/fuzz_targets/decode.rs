//! Any bytes through the decode path, with limits small enough that the
//! fuzzer's memory bound is never the reason a run stops.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    pumice::fuzzing::decode(data);
});
