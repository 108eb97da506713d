//! `pumice inspect`: what an image file holds — size, layout, sample type,
//! format, assumed encoding, ICC and EXIF summaries, physical resolution,
//! per-channel statistics, noise estimate and histogram — for people or, with
//! `--json`, for scripts.

use std::path::{Path, PathBuf};

use clap::Args;

use super::json::{Value, obj, opt, text};
use super::{Exit, report};
use pumice::io::file::{Location, read_input, write_atomic};
use pumice::io::{DecodeOptions, Format, Limits, decode};
use pumice::measure::metadata::{self, ExifSummary, IccSummary};
use pumice::measure::plot::{self, Canvas, Series};
use pumice::measure::stats::{self, PERCENTILES};
use pumice::measure::{ChannelStats, channel_stats, noise_sigma};
use pumice::ops::scan::{SkewEstimate, gray_plane, measure_skew};
use pumice::raster::{Layout, Raster, Resolution, ResolutionUnit, SampleType};

const INSPECT_HELP: &str = "\
Values are on the source's own scale: integer files as codes (0–255, 0–65535)
and as fractions of full scale (code / 255, code / 65535); float files as
stored. Statistics skip NaN and infinite samples (they are counted). Standard
deviation is the population one (divisor N). Percentiles use linear
interpolation between closest ranks (numpy's default): rank p/100·(N − 1).
`at 0` and `at max` count samples at or below 0 and at or above full scale.
The noise σ is the median absolute finest diagonal db2 wavelet coefficient
divided by 0.6745 (Donoho & Johnstone 1994). The terminal histogram has 64
columns over the full scale (float: over [min(0, lowest), max(1, highest)]),
each column as tall as its count relative to the fullest column.

--json prints one array with an object per image; see README.md for the fields.";

/// Arguments of `pumice inspect`.
#[derive(Debug, Args)]
#[command(after_help = INSPECT_HELP)]
pub struct InspectArgs {
    /// Images to describe (`-` reads standard input)
    #[arg(value_name = "IMAGE", required = true)]
    pub images: Vec<PathBuf>,

    /// Print JSON for scripts instead of text
    #[arg(long)]
    pub json: bool,

    /// Draw the histogram as a PNG plot (one image only)
    #[arg(long, value_name = "FILE.png")]
    pub plot: Option<PathBuf>,

    /// Replace the plot file if it exists
    #[arg(long)]
    pub overwrite: bool,

    /// Also measure the skew of text and ruled lines (as the `deskew` step does, within ±10°)
    #[arg(long)]
    pub skew: bool,
}

/// Bins of the histogram in `--json` and `--plot`.
const BINS: usize = 256;
/// Columns of the terminal histogram (each four of the 256 bins).
const COLUMNS: usize = 64;

/// Decodes `path` as `pumice run` would (upright, default encoding), keeping the format.
pub(super) fn load(path: &Path) -> Result<(Raster, Format), String> {
    let location = Location::parse(path);
    let bytes = read_input(&location, Limits::DEFAULT.max_bytes).map_err(|e| format!("cannot read: {e}"))?;
    let raster = decode(&bytes, &DecodeOptions::default()).map_err(|e| e.to_string())?;
    // decode succeeded, so the format was recognised.
    let format = Format::detect(&bytes).ok_or("the format was not recognised")?;
    Ok((raster, format))
}

/// Writes a picture as PNG to `path`, refusing to replace a file unless `overwrite`.
pub(super) fn write_png(path: &Path, canvas: &Canvas, overwrite: bool) -> Result<(), String> {
    let bytes = canvas.to_png().map_err(|e| e.to_string())?;
    write_atomic(&Location::parse(path), &bytes, overwrite).map_err(|e| match e.kind() {
        std::io::ErrorKind::AlreadyExists => "exists; add --overwrite to replace it".to_string(),
        _ => format!("cannot write: {e}"),
    })
}

/// The channel names of a layout, in storage order.
pub(super) fn channel_names(layout: Layout) -> &'static [&'static str] {
    match layout {
        Layout::Gray => &["gray"],
        Layout::GrayAlpha => &["gray", "alpha"],
        Layout::Rgb => &["r", "g", "b"],
        Layout::Rgba => &["r", "g", "b", "alpha"],
    }
}

/// Everything reported for one image.
struct Inspection {
    file: String,
    format: Format,
    width: usize,
    height: usize,
    layout: Layout,
    sample: SampleType,
    encoding: &'static str,
    icc: Option<IccSummary>,
    icc_bytes: Option<usize>,
    exif: Option<ExifSummary>,
    exif_present: bool,
    resolution: Option<Resolution>,
    channels: Vec<ChannelReport>,
    /// The histogram's value range (on the raster scale).
    range: (f64, f64),
}

struct ChannelReport {
    name: &'static str,
    stats: ChannelStats,
    noise: Option<f64>,
    histogram: Vec<u64>,
}

fn inspect(path: &Path, raster: &Raster, format: Format) -> Result<Inspection, String> {
    let sample = raster.metadata.source_sample.unwrap_or(SampleType::F32);
    let levels = raster.levels;
    let per_channel: Vec<(ChannelStats, Option<f64>)> =
        raster.planes().iter().map(|p| (channel_stats(p, levels), noise_sigma(p, levels))).collect();
    let range = if sample.max_code().is_some() {
        (0.0, 1.0)
    } else {
        let lo = per_channel.iter().map(|c| c.0.min).filter(|v| v.is_finite()).fold(0.0, f64::min);
        let hi = per_channel.iter().map(|c| c.0.max).filter(|v| v.is_finite()).fold(1.0, f64::max);
        (lo, hi)
    };
    let channels = raster
        .planes()
        .iter()
        .zip(per_channel)
        .zip(channel_names(raster.layout()))
        .map(|((p, (stats, noise)), &name)| ChannelReport {
            name,
            stats,
            noise,
            histogram: stats::binned_counts(p, range.0, range.1, BINS),
        })
        .collect();
    let meta = &raster.metadata;
    Ok(Inspection {
        file: Location::parse(path).display(),
        format,
        width: raster.width(),
        height: raster.height(),
        layout: raster.layout(),
        sample,
        encoding: raster.encoding.name(),
        icc: meta.icc_profile.as_deref().and_then(metadata::icc_summary),
        icc_bytes: meta.icc_profile.as_ref().map(Vec::len),
        exif: meta.exif.as_deref().and_then(metadata::exif_summary),
        exif_present: meta.exif.is_some(),
        resolution: meta.resolution,
        channels,
        range,
    })
}

pub fn run(args: InspectArgs) -> Exit {
    if args.plot.is_some() && args.images.len() != 1 {
        report("--plot draws one image's histogram; give one IMAGE");
        return Exit::Usage;
    }
    let mut failed = false;
    let mut json = Vec::new();
    for (i, path) in args.images.iter().enumerate() {
        let name = Location::parse(path).display();
        match load(path).and_then(|(raster, format)| {
            let skew = args.skew.then(|| skew_of(&raster));
            inspect(path, &raster, format).map(|found| (found, skew))
        }) {
            Ok((found, skew)) => {
                if let Some(plot_path) = &args.plot
                    && let Err(e) = write_png(plot_path, &histogram_plot(&found), args.overwrite)
                {
                    report(format!("{}: {e}", plot_path.display()));
                    failed = true;
                }
                if args.json {
                    let mut entry = to_json(&found);
                    if let (Value::Object(fields), Some(skew)) = (&mut entry, &skew) {
                        fields.insert("skew".into(), skew_json(skew));
                    }
                    json.push(entry);
                } else {
                    if i > 0 {
                        println!();
                    }
                    print!("{}", to_text(&found));
                    match &skew {
                        Some(Ok(SkewEstimate { degrees: Some(d), confidence })) => {
                            println!("skew: {d:.3}° clockwise (confidence {confidence:.2})")
                        }
                        Some(Ok(SkewEstimate { degrees: None, confidence })) => {
                            println!("skew: no skew found (confidence {confidence:.2})")
                        }
                        Some(Err(e)) => println!("skew: not measured: {e}"),
                        None => {}
                    }
                }
            }
            Err(e) => {
                report(format!("{name}: {e}"));
                failed = true;
                if args.json {
                    json.push(obj(vec![("file", text(name)), ("error", text(e))]));
                }
            }
        }
    }
    if args.json {
        println!("{}", Value::Array(json));
    }
    if failed { Exit::InputFailed } else { Exit::Done }
}

/// The skew `deskew` would find, measured on the plane it measures (BT.709 luma of the encoded values).
fn skew_of(raster: &Raster) -> Result<SkewEstimate, String> {
    let gray = gray_plane(raster).map_err(|e| e.to_string())?;
    measure_skew(&gray, 10.0).map_err(|e| e.to_string())
}

fn skew_json(skew: &Result<SkewEstimate, String>) -> Value {
    match skew {
        Ok(s) => obj(vec![
            ("degrees_clockwise", opt(s.degrees, Value::from)),
            ("confidence", Value::from(s.confidence)),
        ]),
        Err(e) => obj(vec![("error", text(e.clone()))]),
    }
}

fn histogram_plot(found: &Inspection) -> Canvas {
    let series: Vec<Series> = found
        .channels
        .iter()
        .map(|c| Series {
            name: c.name.to_string(),
            colour: plot::channel_colour(c.name),
            counts: c.histogram.clone(),
        })
        .collect();
    match found.sample.max_code() {
        // Codes k sit at the centres of their bins: the axis runs from −½ to max + ½.
        Some(max) => {
            let max = f64::from(max);
            let ticks: Vec<f64> =
                (0..=4).map(|i| (f64::from(i) * (max + 1.0) / 4.0).round().min(max)).collect();
            plot::histogram_plot(&series, (-0.5, max + 0.5), &ticks, "code")
        }
        None => {
            let (lo, hi) = found.range;
            let ticks: Vec<f64> = (0..=4).map(|i| lo + f64::from(i) / 4.0 * (hi - lo)).collect();
            plot::histogram_plot(&series, found.range, &ticks, "value")
        }
    }
}

fn unit_name(u: ResolutionUnit) -> &'static str {
    match u {
        ResolutionUnit::Inch => "inch",
        ResolutionUnit::Centimetre => "cm",
        ResolutionUnit::None => "none",
    }
}

fn sample_key(s: SampleType) -> &'static str {
    match s {
        SampleType::U8 => "u8",
        SampleType::U16 => "u16",
        SampleType::F32 => "f32",
    }
}

fn bits(s: SampleType) -> u32 {
    match s {
        SampleType::U8 => 8,
        SampleType::U16 => 16,
        SampleType::F32 => 32,
    }
}

fn resolution_json(r: &Resolution) -> Value {
    let size = metadata::pixel_size_um(r);
    obj(vec![
        ("x", Value::from(r.x)),
        ("y", Value::from(r.y)),
        ("unit", text(unit_name(r.unit))),
        ("pixel_width_um", opt(size, |s| Value::from(s.0))),
        ("pixel_height_um", opt(size, |s| Value::from(s.1))),
    ])
}

/// The summary numbers of a channel multiplied by `scale` (1 for values, full scale for codes).
fn numbers_json(c: &ChannelReport, scale: f64) -> Vec<(&'static str, Value)> {
    let s = &c.stats;
    let mut v = vec![
        ("min", Value::from(s.min * scale)),
        ("max", Value::from(s.max * scale)),
        ("mean", Value::from(s.mean * scale)),
        ("std", Value::from(s.std * scale)),
    ];
    const KEYS: [&str; 5] = ["p1", "p5", "p50", "p95", "p99"];
    debug_assert_eq!(KEYS.len(), PERCENTILES.len());
    for (key, &(_, value)) in KEYS.iter().zip(&s.percentiles) {
        v.push((key, Value::from(value * scale)));
    }
    v.push(("noise_sigma", opt(c.noise, |n| Value::from(n * scale))));
    v
}

fn to_json(f: &Inspection) -> Value {
    let full = f.sample.max_code();
    let channels = f
        .channels
        .iter()
        .map(|c| {
            let mut fields = vec![("channel", text(c.name)), ("count", Value::from(c.stats.count))];
            fields.extend(numbers_json(c, 1.0));
            fields.push(("codes", opt(full, |m| obj(numbers_json(c, f64::from(m))))));
            fields.push(("at_zero", Value::from(c.stats.at_zero)));
            fields.push(("at_full", Value::from(c.stats.at_full)));
            fields.push(("non_finite", Value::from(c.stats.non_finite)));
            fields.push(("histogram", Value::Array(c.histogram.iter().map(|&n| Value::from(n)).collect())));
            obj(fields)
        })
        .collect();
    obj(vec![
        ("file", text(&f.file)),
        ("format", text(f.format.name())),
        ("width", Value::from(f.width)),
        ("height", Value::from(f.height)),
        ("layout", text(f.layout.name())),
        ("channels", Value::Array(channel_names(f.layout).iter().map(|n| text(*n)).collect())),
        ("sample", text(sample_key(f.sample))),
        ("bits", Value::from(bits(f.sample))),
        ("full_scale", opt(full, Value::from)),
        ("encoding", text(f.encoding)),
        (
            "icc",
            opt(f.icc_bytes, |bytes| {
                obj(vec![
                    ("bytes", Value::from(bytes)),
                    ("version", opt(f.icc.as_ref(), |i| text(&i.version))),
                    ("class", opt(f.icc.as_ref(), |i| text(&i.class))),
                    ("colour_space", opt(f.icc.as_ref(), |i| text(&i.colour_space))),
                    ("description", opt(f.icc.as_ref().and_then(|i| i.description.as_ref()), text)),
                ])
            }),
        ),
        (
            "exif",
            if f.exif_present {
                let e = f.exif.clone().unwrap_or_default();
                obj(vec![
                    ("readable", Value::Bool(f.exif.is_some())),
                    ("orientation", opt(e.orientation, Value::from)),
                    ("date_time_original", opt(e.date_time_original, text)),
                    ("resolution", opt(e.resolution.as_ref(), resolution_json)),
                ])
            } else {
                Value::Null
            },
        ),
        ("resolution", opt(f.resolution.as_ref(), resolution_json)),
        ("histogram_range", Value::Array(vec![Value::from(f.range.0), Value::from(f.range.1)])),
        ("stats", Value::Array(channels)),
    ])
}

/// A number for the text table: up to `decimals` decimals, `-` when not finite.
fn num(v: f64, decimals: usize) -> String {
    if v.is_finite() { format!("{v:.decimals$}") } else { "-".into() }
}

fn resolution_text(r: &Resolution) -> String {
    let density = match r.unit {
        ResolutionUnit::None => format!("{} : {} (aspect only, no unit)", num(r.x, 4), num(r.y, 4)),
        u => format!("{} × {} pixels per {}", num(r.x, 2), num(r.y, 2), unit_name(u)),
    };
    match metadata::pixel_size_um(r) {
        Some((w, h)) => format!("{density} (pixel {} × {} µm)", num(w, 4), num(h, 4)),
        None => density,
    }
}

fn to_text(f: &Inspection) -> String {
    let mut out = format!("{}\n", f.file);
    let mut line = |label: &str, text: String| out.push_str(&format!("  {label:<11} {text}\n"));
    line("size", format!("{} × {} ({} pixels)", f.width, f.height, f.width * f.height));
    line("type", format!("{}, {}, {}", f.format.name(), f.layout.name(), f.sample.name()));
    line("encoding", format!("{} (what `pumice run` assumes by default)", f.encoding));
    line(
        "icc",
        match (&f.icc, f.icc_bytes) {
            (_, None) => "none".into(),
            (None, Some(n)) => format!("{n} bytes, unreadable header"),
            (Some(i), Some(n)) => format!(
                "{n} bytes, v{} {} {}: {}",
                i.version,
                i.class,
                i.colour_space,
                i.description.as_deref().map_or("no description".into(), |d| format!("\"{d}\""))
            ),
        },
    );
    line(
        "exif",
        match (&f.exif, f.exif_present) {
            (_, false) => "none".into(),
            (None, true) => "present, unreadable".into(),
            (Some(e), true) => {
                let mut parts = vec![format!(
                    "orientation {}",
                    e.orientation.map_or("not set".into(), |o| o.to_string())
                )];
                if let Some(t) = &e.date_time_original {
                    parts.push(format!("taken {t}"));
                }
                if let Some(r) = &e.resolution {
                    parts.push(format!("camera resolution {}", resolution_text(r)));
                }
                parts.join(", ")
            }
        },
    );
    line("resolution", f.resolution.as_ref().map_or("not recorded".into(), resolution_text));
    let full = f.sample.max_code();
    out.push_str(&format!(
        "  {:<6} {:<6} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>9} {:>8} {:>8}\n",
        "chan",
        "scale",
        "min",
        "max",
        "mean",
        "std",
        "p1",
        "p5",
        "p50",
        "p95",
        "p99",
        "noise σ",
        "at 0",
        "at max"
    ));
    for c in &f.channels {
        let s = &c.stats;
        let mut row = |scale_name: &str, scale: f64, decimals: usize, name: &str, counts: bool| {
            let mut cells = vec![num(s.min * scale, decimals), num(s.max * scale, decimals)];
            cells.push(num(s.mean * scale, decimals + 2));
            cells.push(num(s.std * scale, decimals + 2));
            cells.extend(s.percentiles.iter().map(|&(_, v)| num(v * scale, decimals)));
            cells.push(c.noise.map_or("-".into(), |n| num(n * scale, decimals + 2)));
            let cells: Vec<String> = cells.iter().map(|c| format!("{c:>9}")).collect();
            let tail = if counts { format!(" {:>8} {:>8}", s.at_zero, s.at_full) } else { String::new() };
            out.push_str(&format!("  {name:<6} {scale_name:<6} {}{tail}\n", cells.join(" ")));
        };
        match full {
            Some(max) => {
                row("code", f64::from(max), 0, c.name, true);
                row("0–1", 1.0, 4, "", false);
            }
            None => row("value", 1.0, 4, c.name, true),
        }
        if s.non_finite > 0 {
            out.push_str(&format!("  {:<6} {} samples are NaN or infinite\n", "", s.non_finite));
        }
    }
    out.push_str("  histogram\n");
    let (lo, hi) = match full {
        Some(max) => (String::from("0"), max.to_string()),
        None => (num(f.range.0, 3), num(f.range.1, 3)),
    };
    for c in &f.channels {
        out.push_str(&terminal_histogram(c.name, &c.histogram, &lo, &hi));
    }
    out
}

/// Three lines of block characters, 64 columns, each column's height (in
/// eighths of a line, up to 24) proportional to its count relative to the
/// fullest column; the label and the range under it.
fn terminal_histogram(name: &str, bins: &[u64], lo: &str, hi: &str) -> String {
    const BLOCKS: [char; 9] = [' ', '▁', '▂', '▃', '▄', '▅', '▆', '▇', '█'];
    const ROWS: usize = 3;
    let per = bins.len().div_ceil(COLUMNS).max(1);
    let columns: Vec<u64> = bins.chunks(per).map(|c| c.iter().sum()).collect();
    let peak = columns.iter().copied().max().unwrap_or(0).max(1);
    // Eighths of a line per column; any non-zero count shows at least one.
    let heights: Vec<usize> =
        columns
            .iter()
            .map(|&n| {
                if n == 0 {
                    0
                } else {
                    ((n as f64 / peak as f64 * (ROWS * 8) as f64).round() as usize).max(1)
                }
            })
            .collect();
    let mut out = String::new();
    for row in (0..ROWS).rev() {
        let label = if row == ROWS - 1 { name } else { "" };
        let bar: String = heights.iter().map(|&h| BLOCKS[h.saturating_sub(row * 8).min(8)]).collect();
        out.push_str(&format!("  {label:<6} │{bar}│\n"));
    }
    let gap = columns.len().saturating_sub(lo.chars().count() + hi.chars().count());
    out.push_str(&format!("  {:<6}  {lo}{}{hi}\n", "", " ".repeat(gap)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn terminal_histogram_has_three_bar_lines_and_a_scale() {
        let mut bins = vec![0u64; 256];
        bins[0] = 100;
        bins[255] = 1;
        let text = terminal_histogram("r", &bins, "0", "255");
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 4);
        // The fullest column is three full blocks; the single count shows as one eighth.
        assert!(lines.iter().take(3).all(|l| l.contains("│█")));
        assert!(lines[2].ends_with("▁│"));
        assert!(lines[3].trim_end().ends_with("255"));
        assert_eq!(lines[0].chars().filter(|&c| c != ' ').count(), 1 + 1 + 2);
    }
}
