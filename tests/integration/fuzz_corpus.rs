//! Replays the committed fuzz corpora (`fuzz/corpus/TARGET/`) and the inputs
//! that once crashed a target (`fuzz/regressions/TARGET/`, each named after
//! what it caught) through the same entry points the fuzz targets call, so
//! `cargo test` keeps every case the fuzzers found without needing the fuzzer.

use std::fs;
use std::path::Path;

/// Runs every input of `target`; panics naming each input that panicked.
fn replay(target: &str, run: impl Fn(&[u8])) -> usize {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz");
    let mut n = 0;
    let mut panicked = Vec::new();
    for folder in ["corpus", "regressions"] {
        let Ok(entries) = fs::read_dir(root.join(folder).join(target)) else { continue };
        for e in entries {
            let path = e.unwrap().path();
            let bytes = fs::read(&path).unwrap();
            if std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| run(&bytes))).is_err() {
                panicked.push(path.display().to_string());
            }
            n += 1;
        }
    }
    assert!(panicked.is_empty(), "{target}: {} inputs panicked:\n{}", panicked.len(), panicked.join("\n"));
    n
}

fn text(bytes: &[u8]) -> Option<&str> {
    std::str::from_utf8(bytes).ok()
}

#[test]
fn the_fuzz_corpora_replay_without_panics() {
    assert!(replay("decode", pumice::fuzzing::decode) >= 10);
    assert!(
        replay("step", |b| if let Some(t) = text(b) {
            pumice::fuzzing::step(t)
        }) >= 20
    );
    assert!(
        replay("recipe", |b| if let Some(t) = text(b) {
            pumice::fuzzing::recipe(t)
        }) >= 4
    );
    assert!(
        replay("template", |b| if let Some(t) = text(b) {
            pumice::fuzzing::template(t)
        }) >= 5
    );
}
