//! The run report (`--report FILE.json`) and the per-output processing record
//! (`--sidecar`): enough to know what was done to every file and to repeat the run.

use std::path::Path;
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use serde_json::{Map, Value, json};

use super::{FileOutcome, Plan, PlannedFile, Shard, Status};
use crate::io::file::{self, Location};
use crate::job::{JobSummary, RunOptions};
use crate::pipeline::Pipeline;
use crate::raster::{Note, NoteValue};

/// The report format's version; it changes when a field changes meaning.
pub const REPORT_VERSION: u32 = 1;

/// What is said once per run.
#[derive(Clone, Debug)]
pub struct RunHeader {
    pub started: SystemTime,
    /// The command line as given.
    pub command: Vec<String>,
    pub shard: Option<Shard>,
}

/// Counts of how the files ended.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Tally {
    pub done: usize,
    pub skipped: usize,
    pub failed: usize,
    pub not_run: usize,
}

impl Tally {
    pub fn of(outcomes: &[FileOutcome]) -> Tally {
        let mut t = Tally::default();
        for o in outcomes {
            match o.status {
                Status::Done(_) => t.done += 1,
                Status::Skipped(_) => t.skipped += 1,
                Status::Failed(_) => t.failed += 1,
                Status::NotRun(_) => t.not_run += 1,
            }
        }
        t
    }
}

/// Writes the whole report to `path` (atomically: a temporary file beside it,
/// renamed into place). The run, the summary and the unsupported files come
/// first, pretty-printed; the per-file entries follow one per line, each
/// serialised as it is written, so the report costs no memory per file
/// beyond the outcomes themselves.
pub fn write(
    path: &Path,
    header: &RunHeader,
    plan: &Plan,
    outcomes: &[FileOutcome],
    pipeline: &Pipeline,
    options: &RunOptions,
    elapsed: Duration,
) -> std::io::Result<()> {
    use std::io::Write;
    let tally = Tally::of(outcomes);
    let head = json!({
        "report_version": REPORT_VERSION,
        "run": run_entry(header, pipeline, options),
        "summary": {
            "discovered": plan.discovered,
            "planned": plan.files.len(),
            "done": tally.done,
            "skipped": tally.skipped,
            "failed": tally.failed,
            "not_run": tally.not_run,
            "unsupported": plan.unsupported.len(),
            "seconds": round3(elapsed.as_secs_f64()),
            "peak_memory_bytes": peak_memory_bytes(),
        },
        "unsupported": plan.unsupported.iter().map(|p| p.display().to_string()).collect::<Vec<_>>(),
    });
    let head = serde_json::to_string_pretty(&head).map_err(std::io::Error::other)?;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let mut builder = tempfile::Builder::new();
    builder.prefix(".report.").suffix(".tmp");
    // An ordinary file's permissions (0666 less the umask), not a temporary's 0600.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(std::fs::Permissions::from_mode(0o666));
    }
    let tmp = builder.tempfile_in(dir)?;
    let mut out = std::io::BufWriter::new(tmp);
    // `head` is an object: reopen it to append the file list.
    out.write_all(head.trim_end().trim_end_matches('}').trim_end().as_bytes())?;
    out.write_all(b",\n  \"files\": [")?;
    for (i, (f, o)) in plan.files.iter().zip(outcomes).enumerate() {
        out.write_all(if i == 0 { b"\n    " } else { b",\n    " })?;
        serde_json::to_writer(&mut out, &file_entry(f, o)).map_err(std::io::Error::other)?;
    }
    out.write_all(b"\n  ]\n}\n")?;
    let tmp = out.into_inner().map_err(|e| e.into_error())?;
    tmp.as_file().sync_all()?;
    tmp.persist(path).map_err(|e| e.error)?;
    Ok(())
}

fn run_entry(header: &RunHeader, pipeline: &Pipeline, options: &RunOptions) -> Value {
    let mut opts = Map::new();
    for (k, v) in options.describe() {
        opts.insert(k.into(), Value::String(v));
    }
    json!({
        "tool": "pumice",
        "version": env!("CARGO_PKG_VERSION"),
        "started": rfc3339(header.started),
        "command": header.command,
        "steps": pipeline.steps.iter().map(|s| s.to_string()).collect::<Vec<_>>(),
        "options": opts,
        "shard": header.shard.map(|s| json!({"index": s.index, "count": s.count})),
    })
}

fn file_entry(file: &PlannedFile, outcome: &FileOutcome) -> Value {
    let mut entry = Map::new();
    entry.insert("input".into(), file.input.path.display().to_string().into());
    entry.insert("output".into(), file.output.display().to_string().into());
    let (status, detail) = match &outcome.status {
        Status::Done(_) => ("done", None),
        Status::Skipped(r) => ("skipped", Some(r.describe().to_string())),
        Status::Failed(e) => ("failed", Some(e.clone())),
        Status::NotRun(why) => ("not-run", Some((*why).to_string())),
    };
    entry.insert("status".into(), status.into());
    entry.insert(
        if status == "failed" { "error" } else { "reason" }.into(),
        detail.map_or(Value::Null, Value::from),
    );
    entry.insert("seconds".into(), round3(outcome.elapsed.as_secs_f64()).into());
    if let Status::Done(s) = &outcome.status {
        for (k, v) in summary_fields(s) {
            entry.insert(k.into(), v);
        }
    }
    Value::Object(entry)
}

fn summary_fields(s: &JobSummary) -> Vec<(&'static str, Value)> {
    let mut fields = vec![
        (
            "input_image",
            json!({
                "width": s.input_size.0, "height": s.input_size.1,
                "layout": s.input_layout.name(), "depth": s.input_sample.name(),
            }),
        ),
        (
            "output_image",
            json!({
                "width": s.output_size.0, "height": s.output_size.1,
                "format": s.output_format.name(), "depth": s.output_sample.name(),
            }),
        ),
        ("input_sha256", s.input_sha256.clone().into()),
        ("output_sha256", s.output_sha256.clone().into()),
        ("notes", notes_json(&s.notes).into()),
    ];
    if !s.pages.is_empty() {
        let pages: Vec<Value> = s
            .pages
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let mut page = Map::new();
                page.insert("page".into(), (i + 1).into());
                if let Some(out) = &p.output {
                    page.insert("output".into(), out.display().to_string().into());
                    page.insert("output_sha256".into(), p.output_sha256.clone().into());
                }
                page.insert("width".into(), p.output_size.0.into());
                page.insert("height".into(), p.output_size.1.into());
                page.insert("notes".into(), notes_json(&p.notes).into());
                Value::Object(page)
            })
            .collect();
        fields.push(("pages", pages.into()));
    }
    fields
}

/// The notes of a page as JSON objects.
fn notes_json(notes: &[Note]) -> Vec<Value> {
    notes
        .iter()
        .map(|n| match &n.value {
            NoteValue::Number { value, unit } => {
                json!({"operator": n.operator, "name": n.name, "value": value, "unit": unit})
            }
            NoteValue::Text(t) => json!({"operator": n.operator, "name": n.name, "text": t}),
        })
        .collect()
}

/// Writes the processing record of one output to `OUTPUT.record.json`: the
/// tool and version, the steps with every parameter, the options, the input
/// with its hash, the output's hash, and what the steps measured.
pub fn write_sidecar(
    file: &PlannedFile,
    summary: &JobSummary,
    pipeline: &Pipeline,
    options: &RunOptions,
) -> std::io::Result<()> {
    let header = RunHeader { started: SystemTime::now(), command: std::env::args().collect(), shard: None };
    let mut record = Map::new();
    record.insert("record_version".into(), REPORT_VERSION.into());
    record.insert("run".into(), run_entry(&header, pipeline, options));
    record.insert("input".into(), file.input.path.display().to_string().into());
    record.insert("output".into(), file.output.display().to_string().into());
    for (k, v) in summary_fields(summary) {
        record.insert(k.into(), v);
    }
    // One file per page: each page file gets the record, with its own name.
    let outputs: Vec<&Path> = if summary.pages.iter().any(|p| p.output.is_some()) {
        summary.pages.iter().filter_map(|p| p.output.as_deref()).collect()
    } else {
        vec![file.output.as_path()]
    };
    for output in outputs {
        record.insert("output".into(), output.display().to_string().into());
        let text =
            serde_json::to_string_pretty(&Value::Object(record.clone())).map_err(std::io::Error::other)?;
        file::write_atomic(&Location::Path(sidecar_path(output)), (text + "\n").as_bytes(), true)?;
    }
    Ok(())
}

/// Where the processing record of `output` goes.
pub fn sidecar_path(output: &Path) -> std::path::PathBuf {
    let mut name = output.file_name().unwrap_or_default().to_os_string();
    name.push(".record.json");
    output.with_file_name(name)
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

/// The process's peak resident memory (`VmHWM` of /proc/self/status, proc(5)), on Linux.
pub fn peak_memory_bytes() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// `t` as an RFC 3339 UTC timestamp with seconds, e.g. `2026-12-02T03:04:05Z`.
pub fn rfc3339(t: SystemTime) -> String {
    let secs = t.duration_since(UNIX_EPOCH).map_or(0, |d| d.as_secs());
    let (days, rem) = (secs / 86_400, secs % 86_400);
    let (y, m, d) = civil_from_days(days as i64);
    format!("{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z", rem / 3600, rem % 3600 / 60, rem % 60)
}

/// Proleptic Gregorian date of `z` days after 1970-01-01 (H. Hinnant,
/// "chrono-Compatible Low-Level Date Algorithms", `civil_from_days`).
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timestamps_are_rfc3339_utc() {
        assert_eq!(rfc3339(UNIX_EPOCH), "1970-01-01T00:00:00Z");
        // 951_782_400 s after the epoch is 2000-02-29 00:00:00 UTC (a leap day; POSIX time, no leap seconds).
        assert_eq!(rfc3339(UNIX_EPOCH + Duration::from_secs(951_782_400 + 3_723)), "2000-02-29T01:02:03Z");
        // 4_102_444_800 s is 2100-01-01 00:00:00 UTC (as `date -u -d @4102444800` prints).
        assert_eq!(rfc3339(UNIX_EPOCH + Duration::from_secs(4_102_444_800)), "2100-01-01T00:00:00Z");
    }

    #[test]
    fn sidecars_sit_beside_their_output() {
        assert_eq!(sidecar_path(Path::new("out/a.tif")), Path::new("out/a.tif.record.json"));
    }
}
