//! `pumice diff`: how far image B is from image A — PSNR, SSIM, the largest
//! difference and where it is, how many pixels differ — with thresholds that
//! turn the answer into an exit code for scripts.

use std::path::PathBuf;

use clap::Args;

use super::inspect::{channel_names, load, write_png};
use super::json::{Value, obj, opt, text};
use super::{Exit, report};
use pumice::io::file::Location;
use pumice::measure::{compare, plot};

const DIFF_HELP: &str = "\
Both images are read as `pumice run` reads them (upright, values on their own
scale: codes / full scale for integer files, as stored for float files) and
compared sample by sample; they must have the same size and layout.

PSNR = 10·log10(L² / MSE) with L the full scale of A's sample type (255 for
8-bit, 65535 for 16-bit, 1.0 for float), over all channels (alpha included)
and per channel; identical images have PSNR +inf (`null` in JSON).
SSIM (Wang, Bovik, Sheikh & Simoncelli 2004: 11×11 Gaussian window σ = 1.5,
K1 = 0.01, K2 = 0.03, population moments) is computed on the BT.709 luma of
the values as stored (not linear light), or per channel with --channels, and
averaged over the pixels at least 5 from every edge; images under 11×11 get none.
--max-diff is on the 0–1 scale (one 8-bit code is 1/255 ≈ 0.0039).
--heatmap draws max over channels |A − B| per pixel, scaled so the largest
difference is white: black, purple, red, orange, white.

Exit codes: 0 within every threshold given, 1 a threshold was exceeded or an
image could not be read or compared, 2 bad usage.";

/// Arguments of `pumice diff`.
#[derive(Debug, Args)]
#[command(after_help = DIFF_HELP)]
pub struct DiffArgs {
    /// The reference image
    #[arg(value_name = "A")]
    pub a: PathBuf,

    /// The image compared with it
    #[arg(value_name = "B")]
    pub b: PathBuf,

    /// Print JSON for scripts instead of text
    #[arg(long)]
    pub json: bool,

    /// Fail (exit 1) if any sample differs by more than X (0–1 scale)
    #[arg(long, value_name = "X", value_parser = non_negative)]
    pub max_diff: Option<f64>,

    /// Fail (exit 1) if the overall PSNR is below DB decibels
    #[arg(long, value_name = "DB", value_parser = finite)]
    pub min_psnr: Option<f64>,

    /// Fail (exit 1) if the SSIM is below S
    #[arg(long, value_name = "S", value_parser = finite)]
    pub min_ssim: Option<f64>,

    /// SSIM per channel (and their mean) instead of on BT.709 luma
    #[arg(long)]
    pub channels: bool,

    /// Write a difference heatmap PNG
    #[arg(long, value_name = "FILE.png")]
    pub heatmap: Option<PathBuf>,

    /// Replace the heatmap file if it exists
    #[arg(long)]
    pub overwrite: bool,
}

fn finite(text: &str) -> Result<f64, String> {
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err(format!("expected a finite number, got `{text}`")),
    }
}

fn non_negative(text: &str) -> Result<f64, String> {
    finite(text)
        .and_then(|v| if v >= 0.0 { Ok(v) } else { Err(format!("expected a number ≥ 0, got `{text}`")) })
}

pub fn run(args: DiffArgs) -> Exit {
    let (name_a, name_b) = (Location::parse(&args.a).display(), Location::parse(&args.b).display());
    let (a, _) = match load(&args.a) {
        Ok(r) => r,
        Err(e) => {
            report(format!("{name_a}: {e}"));
            return Exit::InputFailed;
        }
    };
    let (b, _) = match load(&args.b) {
        Ok(r) => r,
        Err(e) => {
            report(format!("{name_b}: {e}"));
            return Exit::InputFailed;
        }
    };
    let result = match compare(&a, &b, args.channels) {
        Ok(c) => c,
        Err(e) => {
            report(format!("{name_a} and {name_b}: cannot compare: {e}"));
            return Exit::InputFailed;
        }
    };
    let mut failures = Vec::new();
    // NaN differences fail every threshold.
    if let Some(x) = args.max_diff
        && (result.largest.value > x || result.largest.value.is_nan())
    {
        failures.push(format!("largest difference {} exceeds --max-diff {x}", result.largest.value));
    }
    if let Some(db) = args.min_psnr
        && (result.psnr < db || result.psnr.is_nan())
    {
        failures.push(format!("PSNR {:.4} dB is below --min-psnr {db}", result.psnr));
    }
    if let Some(s) = args.min_ssim {
        match result.ssim {
            Some(v) if v >= s => {}
            Some(v) => failures.push(format!("SSIM {v:.6} is below --min-ssim {s}")),
            None => {
                failures.push("SSIM needs images of at least 11×11 pixels; --min-ssim cannot pass".into())
            }
        }
    }
    let full = a.metadata.source_sample.and_then(|s| s.max_code());
    // Both integer of one type: the largest difference is a whole number of codes.
    let same_codes = full.is_some() && a.metadata.source_sample == b.metadata.source_sample;
    let largest_code = full.map(|m| {
        let codes = result.largest.value * f64::from(m);
        if same_codes { codes.round() } else { codes }
    });
    let names = channel_names(a.layout());
    if args.json {
        let per = |v: &[f64]| obj(names.iter().zip(v).map(|(n, &x)| (*n, Value::from(x))).collect());
        let l = &result.largest;
        let json = obj(vec![
            ("a", text(&name_a)),
            ("b", text(&name_b)),
            ("width", Value::from(a.width())),
            ("height", Value::from(a.height())),
            ("layout", text(a.layout().name())),
            ("data_range", full.map_or(Value::from(1.0), Value::from)),
            ("mse", Value::from(result.mse)),
            ("psnr", Value::from(result.psnr)),
            ("psnr_channels", per(&result.psnr_per_channel)),
            ("ssim", opt(result.ssim, Value::from)),
            ("ssim_on", text(if args.channels { "channels" } else { "luma" })),
            ("ssim_channels", if args.channels { per(&result.ssim_per_channel) } else { Value::Null }),
            (
                "largest_difference",
                obj(vec![
                    ("value", Value::from(l.value)),
                    ("code", opt(largest_code, Value::from)),
                    ("x", Value::from(l.x)),
                    ("y", Value::from(l.y)),
                    ("channel", text(names[l.channel])),
                ]),
            ),
            ("differing_pixels", Value::from(result.differing_pixels)),
            ("pixels", Value::from(a.width() * a.height())),
            ("passed", Value::Bool(failures.is_empty())),
            ("failures", Value::Array(failures.iter().map(text).collect())),
        ]);
        println!("{json}");
    } else {
        let db = |v: f64| if v.is_finite() { format!("{v:.4} dB") } else { "+inf (identical)".into() };
        let per: Vec<String> =
            names.iter().zip(&result.psnr_per_channel).map(|(n, &v)| format!("{n} {}", db(v))).collect();
        println!("{name_a} vs {name_b}: {} × {} {}", a.width(), a.height(), a.layout().name());
        let range = full.map_or("1.0 (float)".to_string(), |m| {
            format!("{m} (full scale of {})", a.metadata.source_sample.map_or("", |s| s.name()))
        });
        println!(
            "  psnr       {} over all channels; {}; data range {range}",
            db(result.psnr),
            per.join(", ")
        );
        match result.ssim {
            Some(s) if args.channels => {
                let each: Vec<String> =
                    names.iter().zip(&result.ssim_per_channel).map(|(n, v)| format!("{n} {v:.6}")).collect();
                println!("  ssim       {s:.6} (mean over channels: {})", each.join(", "));
            }
            Some(s) => println!("  ssim       {s:.6} (BT.709 luma of the stored values)"),
            None => println!("  ssim       - (the images are smaller than the 11×11 window)"),
        }
        let l = &result.largest;
        let code = largest_code.map_or(String::new(), |c| format!(" = {c} codes"));
        println!("  largest    {:.6}{code} at x {}, y {}, channel {}", l.value, l.x, l.y, names[l.channel]);
        let pixels = (a.width() * a.height()) as f64;
        println!(
            "  differing  {} of {} pixels ({:.3} %)",
            result.differing_pixels,
            a.width() * a.height(),
            result.differing_pixels as f64 / pixels * 100.0
        );
    }
    let mut code = Exit::Done;
    if let Some(path) = &args.heatmap {
        let written = plot::heatmap(&a, &b)
            .map_err(|e| e.to_string())
            .and_then(|c| write_png(path, &c, args.overwrite));
        if let Err(e) = written {
            report(format!("{}: {e}", path.display()));
            code = Exit::InputFailed;
        }
    }
    for f in &failures {
        report(format!("{name_a} vs {name_b}: {f}"));
    }
    if failures.is_empty() { code } else { Exit::InputFailed }
}
