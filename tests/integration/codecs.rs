//! Codec round trips: decode → encode with no steps must give back every 8-bit
//! and every 16-bit code exactly, in PNG and TIFF, gray and RGB(A); f32 TIFF
//! must round-trip bit for bit; metadata must be carried.

use pumice::io::{self, DecodeOptions, EncodeOptions, Format};
use pumice::pipeline::{DomainPolicy, Pipeline};
use pumice::raster::{Encoding, Layout, Metadata, Plane, Raster, Resolution, ResolutionUnit, SampleType};

use crate::harness::{Scratch, pumice};

/// A raster whose samples run through every code of `max` (repeating), each
/// channel shifted so channels differ.
fn all_codes(layout: Layout, max: u32) -> Raster {
    let (w, h) = if max == 255 { (16, 16) } else { (256, 256) };
    let planes = (0..layout.channels())
        .map(|c| {
            Plane::from_fn(w, h, |x, y| {
                (((y * w + x) as u32 + c as u32 * 97) % (max + 1)) as f32 / max as f32
            })
            .unwrap()
        })
        .collect();
    let mut r = Raster::new(planes, layout, Encoding::Srgb).unwrap();
    r.levels = Some(max);
    r.metadata.source_sample = Some(if max == 255 { SampleType::U8 } else { SampleType::U16 });
    r
}

fn codes(r: &Raster, max: u32) -> Vec<Vec<u32>> {
    r.planes()
        .iter()
        .map(|p| p.as_slice().iter().map(|v| (v * max as f32).round() as u32).collect())
        .collect()
}

fn round_trip(r: &Raster, format: Format, steps: &[&str], policy: DomainPolicy) -> Raster {
    let bytes = io::encode(r, &EncodeOptions::new(format)).unwrap();
    let decoded = io::decode(&bytes, &DecodeOptions::default()).unwrap();
    let out = Pipeline::parse(steps).unwrap().run(decoded, policy).unwrap();
    let bytes = io::encode(&out, &EncodeOptions::new(format)).unwrap();
    io::decode(&bytes, &DecodeOptions::default()).unwrap()
}

#[test]
fn every_code_survives_png_and_tiff() {
    for format in [Format::Png, Format::Tiff] {
        for layout in [Layout::Gray, Layout::GrayAlpha, Layout::Rgb, Layout::Rgba] {
            for max in [255, 65535] {
                let r = all_codes(layout, max);
                let back = round_trip(&r, format, &[], DomainPolicy::Auto);
                assert_eq!(back.layout(), layout, "{format:?}");
                assert_eq!(codes(&back, max), codes(&r, max), "{format:?} {layout:?} max {max}");
            }
        }
    }
}

#[test]
fn every_code_survives_a_detour_through_linear_light() {
    // --domain linear makes `flip` (an Any-domain step) convert to linear and back.
    for max in [255, 65535] {
        let r = all_codes(Layout::Rgb, max);
        let back = round_trip(&r, Format::Png, &["invert", "invert"], DomainPolicy::Linear);
        let want = codes(&r, max);
        let got = codes(&back, max);
        // invert twice in linear light is exact up to f32 rounding of 1 − (1 − l):
        // a code may move only where that rounding crosses a rounding threshold, which
        // it never does for the 8-bit codes and does not here for the 16-bit ones.
        assert_eq!(got, want, "max {max}");
    }
}

#[test]
fn f32_tiff_round_trips_bit_for_bit() {
    for layout in [Layout::Gray, Layout::Rgb, Layout::Rgba] {
        let mut state = 7u64;
        let planes = (0..layout.channels())
            .map(|_| {
                Plane::from_fn(37, 11, |_, _| {
                    state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                    f32::from_bits((state >> 33) as u32 & 0x7f7f_ffff)
                        * if state & 1 == 1 { -1.0 } else { 1.0 }
                })
                .unwrap()
            })
            .collect();
        let mut r = Raster::new(planes, layout, Encoding::Linear).unwrap();
        r.metadata.source_sample = Some(SampleType::F32);
        let bytes =
            io::encode(&r, &EncodeOptions { encoding: Encoding::Linear, ..EncodeOptions::new(Format::Tiff) })
                .unwrap();
        let back = io::decode(&bytes, &DecodeOptions::default()).unwrap();
        assert_eq!(back.encoding, Encoding::Linear, "float sources are linear by default");
        for (a, b) in back.planes().iter().zip(r.planes()) {
            let bits = |p: &Plane| p.as_slice().iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(a), bits(b), "{layout:?}");
        }
    }
}

#[test]
fn metadata_is_carried_to_png_tiff_and_jpeg() {
    let mut r = all_codes(Layout::Rgb, 255);
    let icc = b"not a real profile, but carried byte for byte".to_vec();
    r.metadata = Metadata {
        icc_profile: Some(icc.clone()),
        exif: Some(pumice::io::exif::minimal_with_orientation(1, true)),
        orientation: 1,
        // REFERENCES.md [K8]: 300 dpi = 11811.02 px/m; PNG stores the integer 11811.
        resolution: Some(Resolution { x: 300.0, y: 300.0, unit: ResolutionUnit::Inch }),
        source_sample: Some(SampleType::U8),
        source_encoding: None,
        notes: Vec::new(),
    };
    for format in [Format::Png, Format::Tiff, Format::Jpeg, Format::Webp] {
        let bytes = io::encode(&r, &EncodeOptions::new(format)).unwrap();
        let back = io::decode(&bytes, &DecodeOptions::default()).unwrap();
        assert_eq!(back.metadata.icc_profile.as_deref(), Some(&icc[..]), "{format:?} ICC");
        if format != Format::Tiff {
            assert!(back.metadata.exif.is_some(), "{format:?} EXIF");
        }
        if format != Format::Webp {
            let res = back.metadata.resolution.expect("resolution");
            let dpi = match res.unit {
                ResolutionUnit::Inch => res.x,
                ResolutionUnit::Centimetre => res.x * 2.54,
                ResolutionUnit::None => panic!("{format:?} lost the unit"),
            };
            // PNG's integer px/m gives 299.9994 dpi (REFERENCES.md [K8]).
            assert!((dpi - 300.0).abs() < 1e-3, "{format:?}: {dpi} dpi");
        }
        let dropped =
            io::encode(&r, &EncodeOptions { keep_metadata: false, ..EncodeOptions::new(format) }).unwrap();
        let back = io::decode(&dropped, &DecodeOptions::default()).unwrap();
        assert!(
            back.metadata.icc_profile.is_none() && back.metadata.exif.is_none(),
            "{format:?} --meta drop"
        );
    }
}

#[test]
fn output_is_byte_identical_across_runs_and_thread_counts() {
    let s = Scratch::new();
    let r = all_codes(Layout::Rgb, 255);
    s.write("in.png", &io::encode(&r, &EncodeOptions::new(Format::Png)).unwrap());
    let input = s.path("in.png").display().to_string();
    let mut outputs = Vec::new();
    for (i, threads) in ["1", "2", "3", "1"].iter().enumerate() {
        for ext in ["png", "tif", "jpg", "webp"] {
            let out = s.path(&format!("o{i}.{ext}")).display().to_string();
            pumice(&["run", &input, "-o", &out, "-j", threads, "-s", "gauss:1.3", "-s", "gamma:1.4"]).ok();
            outputs.push((ext, std::fs::read(&out).unwrap()));
        }
    }
    for ext in ["png", "tif", "jpg", "webp"] {
        let mut same = outputs.iter().filter(|(e, _)| *e == ext).map(|(_, b)| b);
        let first = same.next().unwrap();
        assert!(same.all(|b| b == first), "{ext} output differs between runs or thread counts");
    }
}

#[test]
fn alpha_is_flattened_onto_the_background_in_linear_light() {
    // A 50 % transparent black pixel over white: linear 0.5, sRGB code 188 (REFERENCES.md [K1]).
    let planes = vec![Plane::filled(2, 2, 0.0).unwrap(), Plane::filled(2, 2, 0.5).unwrap()];
    let mut r = Raster::new(planes, Layout::GrayAlpha, Encoding::Srgb).unwrap();
    r.metadata.source_sample = Some(SampleType::U8);
    let bytes = io::encode(
        &r,
        &EncodeOptions { chroma: io::Chroma::S444, quality: 100, ..EncodeOptions::new(Format::Jpeg) },
    )
    .unwrap();
    let back = io::decode(&bytes, &DecodeOptions::default()).unwrap();
    assert_eq!(back.layout(), Layout::Gray);
    let code = (back.planes()[0].get(0, 0) * 255.0).round();
    assert!((code - 188.0).abs() <= 1.0, "got code {code}; JPEG at q100 may move a flat patch by 1");
}

#[test]
fn decoding_straight_to_linear_light_equals_converting_afterwards() {
    for (layout, max, format) in [
        (Layout::Rgba, 255, Format::Png),
        (Layout::GrayAlpha, 65535, Format::Png),
        (Layout::Rgb, 65535, Format::Tiff),
        (Layout::Rgb, 255, Format::Webp),
    ] {
        let bytes = io::encode(&all_codes(layout, max), &EncodeOptions::new(format)).unwrap();
        let direct =
            io::decode(&bytes, &DecodeOptions { linear_light: true, ..DecodeOptions::default() }).unwrap();
        let mut after = io::decode(&bytes, &DecodeOptions::default()).unwrap();
        let levels = after.levels;
        assert_eq!(levels, Some(max));
        for p in after.colour_planes_mut() {
            pumice::color::srgb::decode_in_place(p.as_mut_slice(), levels);
        }
        assert_eq!(direct.encoding, Encoding::Linear);
        assert_eq!(direct.metadata.source_encoding, Some(Encoding::Srgb));
        assert_eq!(direct.levels, None);
        // Bit for bit, alpha included (alpha stays code / max).
        assert_eq!(direct.planes(), after.planes(), "{format:?} {}", layout.name());
    }
}
