//! Every operator in the registry on degenerate images — 1×1, 1×N, N×1, 2×2 —
//! in every layout, with every choice of every parameter (border rules
//! included): an error is fine, a panic is not. Table-driven over
//! `registry::OPERATORS`, so new operators are covered without a new test.

use std::panic::{AssertUnwindSafe, catch_unwind};

use pumice::ops::params::{Kind, OpSpec};
use pumice::pipeline::registry::OPERATORS;
use pumice::pipeline::{DomainPolicy, Pipeline, Step};
use pumice::raster::{Encoding, Layout, Plane, Raster};

/// Parameters an operator needs before it does anything at all (beyond a
/// value for each required one, which `some_value` makes up), or values
/// that must relate to each other.
/// An operator that cannot be built from its defaults plus these fails the test:
/// add it here.
const EXTRA: &[(&str, &[(&str, &str)])] = &[
    ("resize", &[("width", "3")]),
    ("crop", &[("width", "1"), ("height", "1")]),
    ("pad", &[("width", "5"), ("height", "4")]),
    ("window", &[("low", "0.1"), ("high", "0.9")]),
    ("nlmeans", &[("h", "0.1")]),
];

/// A value of `kind` for a required parameter.
fn some_value(kind: &Kind) -> String {
    match kind {
        Kind::Number { min, max, min_open, integer } => {
            let mut v = 1f64.clamp(*min, *max);
            if *min_open && v <= *min {
                v = (min + max.min(min + 1.0)) / 2.0;
            }
            if *integer { format!("{}", v.round()) } else { format!("{v}") }
        }
        Kind::Bool => "false".into(),
        Kind::Choice(c) => c[0].into(),
        Kind::Matrix => "1".into(),
        Kind::Ratio { .. } => "0.5".into(),
        Kind::Aspect => "1:1".into(),
        Kind::Colour => "white".into(),
        Kind::File => frame_path(),
    }
}

/// The parameter sets to try: the base set, then each choice of every
/// choice or boolean parameter on its own.
fn variants(spec: &OpSpec) -> Vec<Vec<(Option<String>, String)>> {
    let extra: &[(&str, &str)] = EXTRA.iter().find(|(n, _)| *n == spec.name).map_or(&[], |(_, e)| e);
    let mut base: Vec<(Option<String>, String)> =
        extra.iter().map(|(k, v)| (Some(k.to_string()), v.to_string())).collect();
    for p in spec.params {
        // File parameters always get the test frame, so file-reading steps do real work.
        let is_file = matches!(p.kind, Kind::File);
        if (p.default.is_none() || is_file) && !extra.iter().any(|(k, _)| *k == p.name) {
            base.push((Some(p.name.into()), some_value(&p.kind)));
        }
    }
    let mut out = vec![base.clone()];
    for p in spec.params {
        let choices: Vec<String> = match p.kind {
            Kind::Choice(c) => c.iter().map(|s| s.to_string()).collect(),
            Kind::Bool => vec!["true".into(), "false".into()],
            _ => continue,
        };
        for c in choices {
            let mut v: Vec<_> = base.iter().filter(|(k, _)| k.as_deref() != Some(p.name)).cloned().collect();
            v.push((Some(p.name.into()), c));
            out.push(v);
        }
    }
    out
}

/// A 2×2 gray 16-bit PNG frame for file parameters (flat and dark frames): it
/// matches the 2×2 gray test image and mismatches the others, so both the
/// work and the refusal are exercised.
fn frame_path() -> String {
    static PATH: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    PATH.get_or_init(|| {
        let p = Plane::from_vec(2, 2, vec![0.5, 0.6, 0.7, 0.8]).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        let bytes = pumice::io::encode(&r, &pumice::io::EncodeOptions::new(pumice::io::Format::Png)).unwrap();
        let path = std::env::temp_dir().join(format!("pumice-robustness-frame-{}.png", std::process::id()));
        std::fs::write(&path, bytes).unwrap();
        path.display().to_string()
    })
    .clone()
}

fn raster(w: usize, h: usize, layout: Layout, encoding: Encoding) -> Raster {
    let planes = (0..layout.channels())
        .map(|c| Plane::from_fn(w, h, |x, y| ((x * 7 + y * 3 + c * 5) % 11) as f32 / 10.0).unwrap())
        .collect();
    Raster::new(planes, layout, encoding).unwrap()
}

#[test]
fn every_operator_survives_degenerate_images_with_every_parameter_choice() {
    let sizes = [(1, 1), (1, 7), (7, 1), (2, 2)];
    let layouts = [Layout::Gray, Layout::GrayAlpha, Layout::Rgb, Layout::Rgba];
    let mut runs = 0;
    let mut succeeded = 0;
    let mut panics = Vec::new();
    for spec in OPERATORS {
        let mut built_any = false;
        for params in variants(spec) {
            let step = match Step::build(spec.name, &params) {
                Ok(s) => s,
                // Some combinations are refused by design (e.g. an option that needs another).
                Err(_) => continue,
            };
            built_any = true;
            let pipeline = Pipeline::new(vec![step]);
            for &(w, h) in &sizes {
                for &layout in &layouts {
                    for encoding in [Encoding::Srgb, Encoding::Linear] {
                        runs += 1;
                        let input = raster(w, h, layout, encoding);
                        let outcome = catch_unwind(AssertUnwindSafe(|| {
                            pipeline.run(input, DomainPolicy::Auto).map(|_| ())
                        }));
                        match outcome {
                            Ok(Ok(())) => succeeded += 1,
                            Ok(Err(_)) => {}
                            Err(_) => {
                                panics.push(format!("{} {params:?} on {w}×{h} {}", spec.name, layout.name()))
                            }
                        }
                    }
                }
            }
        }
        assert!(built_any, "`{}` could not be built from its defaults; add it to EXTRA", spec.name);
    }
    assert!(panics.is_empty(), "{} of {runs} runs panicked:\n{}", panics.len(), panics.join("\n"));
    let _ = std::fs::remove_file(frame_path());
    // Most runs must do real work, not stop at a refusal, or the sweep proves little.
    assert!(runs > 1000 && succeeded * 4 > runs * 3, "{succeeded} of {runs} runs succeeded");
}
