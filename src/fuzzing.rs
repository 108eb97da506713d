//! Entry points shared by the fuzz targets (`fuzz/`) and the test that replays
//! their committed corpora (`tests/integration/fuzz_corpus.rs`): each takes
//! arbitrary input, must return without panicking, and bounds the work so a
//! hostile input cannot exhaust memory.

use crate::batch::naming::{Fields, expand};
use crate::io::{DecodeOptions, Limits};
use crate::job::recipe;
use crate::pipeline::{DomainPolicy, Pipeline, Step};
use crate::raster::{Encoding, Layout, Plane, Raster};

/// Limits for fuzzing: 4 Mpx and 64 MiB of samples.
const LIMITS: Limits = Limits { max_pixels: 1 << 22, max_bytes: 64 << 20 };

/// Decodes `data` under [`LIMITS`]; errors are expected, panics are bugs.
pub fn decode(data: &[u8]) {
    let _ = crate::io::decode(data, &DecodeOptions { limits: LIMITS, ..DecodeOptions::default() });
}

/// Parses `text` as a step and, if it parses, runs it on a 5×4 RGBA image
/// with results limited to 2¹⁶ pixels.
pub fn step(text: &str) {
    let Ok(step) = Step::parse(text) else { return };
    let mut pipeline = Pipeline::new(vec![step]);
    pipeline.max_pixels = 1 << 16;
    let planes = (0..4)
        .filter_map(|c| Plane::from_fn(5, 4, |x, y| ((x * 3 + y * 5 + c) % 7) as f32 / 6.0).ok())
        .collect();
    if let Ok(r) = Raster::new(planes, Layout::Rgba, Encoding::Srgb) {
        let _ = pipeline.run(r, DomainPolicy::Auto);
    }
}

/// Parses `text` as a recipe.
pub fn recipe(text: &str) {
    let _ = recipe::parse(text, "fuzz input", None);
}

/// Expands `text` as an output-name template for a sample input.
pub fn template(text: &str) {
    let fields = Fields {
        stem: "plate-07".into(),
        ext: "tif".into(),
        name: "plate-07.tif".into(),
        parent: "day3".into(),
        dir: "day3/wells".into(),
        n: 42,
        page: 3,
    };
    let _ = expand(text, &fields);
}
