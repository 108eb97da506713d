//! Batch runs: many inputs through one pipeline. Discovery (`discover`),
//! output naming (`naming`), sharding across machines (`shard`), the plan
//! (which file goes where, and what to do about outputs that exist), parallel
//! execution with a bounded number of images in flight, and the run report
//! (`report`).
//!
//! Memory: each of the `in_flight` workers holds one image at a time (its
//! file bytes while decoding, then its planes and the step outputs), so the
//! peak is about `in_flight ×` one image's working set, whatever the batch size.
//! Between images a worker keeps the large buffers it freed, for the next
//! image to reuse without page faults, but never more than its working set.

pub mod discover;
pub mod naming;
pub mod report;
pub mod shard;

use std::collections::{HashMap, HashSet};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant, SystemTime};

pub use discover::{Discovery, InputFile, discover};
pub use naming::OutputSpec;
pub use shard::Shard;

use crate::error::Error;
use crate::io::file::Location;
use crate::job::{self, Job, JobSummary, RunOptions};
use crate::pipeline::Pipeline;

/// What to do when an output exists already.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Existing {
    /// Refuse the whole run before any work (the default: nothing is overwritten unasked).
    #[default]
    Refuse,
    /// Replace it.
    Overwrite,
    /// Leave it and skip the input.
    Skip,
    /// Redo the input only when it, or the recipe, was modified after the output.
    Update,
}

/// How a batch runs, beside the pipeline and the run options.
#[derive(Clone, Debug)]
pub struct BatchOptions {
    pub existing: Existing,
    /// When the recipe file was last modified (for [`Existing::Update`]).
    pub recipe_modified: Option<SystemTime>,
    pub shard: Option<Shard>,
    /// Images worked on at once (at least 1).
    pub in_flight: usize,
    /// Stop starting new files after the first failure.
    pub fail_fast: bool,
    /// Write a processing record `OUTPUT.record.json` beside each output.
    pub sidecar: bool,
}

impl Default for BatchOptions {
    fn default() -> Self {
        BatchOptions {
            existing: Existing::Refuse,
            recipe_modified: None,
            shard: None,
            in_flight: 1,
            fail_fast: false,
            sidecar: false,
        }
    }
}

/// Why an input is skipped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SkipReason {
    /// `--skip-existing` and the output exists.
    Exists,
    /// `--update` and the output is newer than the input and the recipe.
    UpToDate,
}

impl SkipReason {
    pub fn describe(self) -> &'static str {
        match self {
            SkipReason::Exists => "the output exists",
            SkipReason::UpToDate => "the output is up to date",
        }
    }
}

/// What the plan does with one input.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Action {
    Run { overwrite: bool },
    Skip(SkipReason),
}

/// One input, its output and the action.
#[derive(Clone, Debug)]
pub struct PlannedFile {
    pub input: InputFile,
    /// The output; with `{page}` in the template, the first page's.
    pub output: PathBuf,
    /// With `{page}` in the template: one output file per page, named so.
    pub pages: Option<naming::PageNames>,
    pub action: Action,
}

/// A checked batch: nothing here has been read or written yet.
#[derive(Debug)]
pub struct Plan {
    /// This shard's inputs, in input order.
    pub files: Vec<PlannedFile>,
    /// Files found in folders that are not images Pumice reads.
    pub unsupported: Vec<PathBuf>,
    /// Inputs found in all (before sharding).
    pub discovered: usize,
    /// Files found inside the output folder (earlier outputs), left out.
    pub in_output_folder: usize,
}

/// Checks a batch before any work: every input has an output name, no two
/// inputs share one, no output is an input, every output's format is writable,
/// and existing outputs are handled as `batch.existing` says. Any problem is an
/// error (a usage error: nothing has been written).
pub fn plan(
    found: Discovery,
    output: &OutputSpec,
    options: &RunOptions,
    batch: &BatchOptions,
) -> Result<Plan, Error> {
    let mut found = found;
    // Earlier outputs inside an input folder are not inputs of this run.
    let mut in_output_folder = 0;
    if let OutputSpec::Folder(dir) = output
        && let Ok(root) = dir.canonicalize()
    {
        found.files.retain(|f| {
            let inside = f.path.canonicalize().is_ok_and(|c| c.starts_with(&root));
            in_output_folder += usize::from(inside);
            !inside
        });
    }
    if let OutputSpec::File(out) = output {
        let parent = match out.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        if !parent.is_dir() {
            return Err(Error::Recipe(format!("the output folder `{}` does not exist", parent.display())));
        }
    }
    let discovered = found.files.len();
    let input_paths: HashSet<PathBuf> =
        found.files.iter().filter_map(|f| f.path.canonicalize().ok()).collect();
    let mut problems = Vec::new();
    let mut claimed: HashMap<PathBuf, PathBuf> = HashMap::new();
    let mut named = Vec::with_capacity(found.files.len());
    for (i, input) in found.files.into_iter().enumerate() {
        let out = match output.output_for(&input, i + 1, options.format) {
            Ok(p) => p,
            Err(e) => {
                problems.push(e);
                continue;
            }
        };
        let key = discover::lexical(&out);
        if let Some(first) = claimed.get(&key) {
            problems.push(format!(
                "`{}` and `{}` would both be written to `{}`; use a name template with {{dir}} or {{n}}",
                first.display(),
                input.path.display(),
                out.display()
            ));
            continue;
        }
        claimed.insert(key, input.path.clone());
        if canonical_target(&out).is_some_and(|c| input_paths.contains(&c)) {
            problems.push(format!(
                "the output `{}` is the input of this run; Pumice never overwrites its inputs — choose another output",
                out.display()
            ));
            continue;
        }
        if let Err(e) = job::output_format(&Location::Path(out.clone()), options) {
            problems.push(format!("`{}`: {e}", out.display()));
            continue;
        }
        let pages = output.page_names_for(&input, i + 1);
        named.push((input, out, pages));
    }
    if !problems.is_empty() {
        return Err(Error::Recipe(summarise(&problems)));
    }
    let mut files = Vec::with_capacity(named.len());
    let mut existing = Vec::new();
    for (input, out, pages) in named {
        if let Some(s) = batch.shard
            && !s.owns(&input.relative)
        {
            continue;
        }
        let action = match (out.exists(), batch.existing) {
            // With --overwrite, an output another process makes meanwhile is replaced too.
            (false, e) => Action::Run { overwrite: e == Existing::Overwrite },
            (true, Existing::Overwrite) => Action::Run { overwrite: true },
            (true, Existing::Skip) => Action::Skip(SkipReason::Exists),
            (true, Existing::Update) => {
                if stale(&input.path, &out, batch.recipe_modified) {
                    Action::Run { overwrite: true }
                } else {
                    Action::Skip(SkipReason::UpToDate)
                }
            }
            (true, Existing::Refuse) => {
                existing.push(out.display().to_string());
                continue;
            }
        };
        files.push(PlannedFile { input, output: out, pages, action });
    }
    if let Some(first) = existing.first() {
        let others = match existing.len() - 1 {
            0 => String::new(),
            n => format!(" (and {n} other outputs)"),
        };
        return Err(Error::Recipe(format!(
            "`{first}` already exists{others}; add --overwrite to replace, --skip-existing to leave, or --update to redo only out-of-date outputs"
        )));
    }
    Ok(Plan { files, unsupported: found.unsupported, discovered, in_output_folder })
}

fn summarise(problems: &[String]) -> String {
    const SHOWN: usize = 5;
    let mut text = problems.iter().take(SHOWN).cloned().collect::<Vec<_>>().join("\n  ");
    if problems.len() > SHOWN {
        text.push_str(&format!("\n  … and {} more", problems.len() - SHOWN));
    }
    text
}

/// The canonical path `out` will have (its folder may not exist yet).
fn canonical_target(out: &Path) -> Option<PathBuf> {
    if let Ok(c) = out.canonicalize() {
        return Some(c);
    }
    let parent = match out.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    Some(parent.canonicalize().ok()?.join(out.file_name()?))
}

/// True when the output is older than the input or the recipe (or its time is unknown).
fn stale(input: &Path, output: &Path, recipe: Option<SystemTime>) -> bool {
    let modified = |p: &Path| std::fs::metadata(p).and_then(|m| m.modified()).ok();
    match (modified(input), modified(output)) {
        (Some(i), Some(o)) => i > o || recipe.is_some_and(|r| r > o),
        _ => true,
    }
}

/// How one planned file ended.
#[derive(Clone, Debug)]
pub enum Status {
    Done(Box<JobSummary>),
    Skipped(SkipReason),
    Failed(String),
    /// Not started, or stopped before writing, because the run was
    /// interrupted or `--fail-fast` stopped it.
    NotRun(&'static str),
}

/// One file's outcome.
#[derive(Clone, Debug)]
pub struct FileOutcome {
    pub status: Status,
    pub elapsed: Duration,
}

/// Signals a running batch reads.
#[derive(Debug, Default)]
pub struct Control {
    /// Set (e.g. by a SIGINT handler) to stop: no new file starts, and files
    /// under way give up before their next stage.
    pub cancel: Arc<AtomicBool>,
}

/// Runs `plan` with `batch.in_flight` workers, calling `observe` as each file
/// ends (from the worker's thread). Returns one outcome per planned file, in
/// plan order. A failing file never stops the others unless `fail_fast`.
pub fn run(
    plan: &Plan,
    pipeline: &Pipeline,
    options: &RunOptions,
    batch: &BatchOptions,
    control: &Control,
    observe: &(dyn Fn(&PlannedFile, &FileOutcome) + Sync),
) -> Vec<FileOutcome> {
    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    let results: Mutex<Vec<Option<FileOutcome>>> = Mutex::new(vec![None; plan.files.len()]);
    let workers = batch.in_flight.clamp(1, plan.files.len().max(1));
    std::thread::scope(|scope| {
        for _ in 0..workers {
            scope.spawn(|| {
                // The worker's large buffers stay mapped from one image to the
                // next, within its one-image working set (see `raster::recycle`).
                let _reuse = crate::raster::recycle::Scope::open();
                loop {
                    let i = next.fetch_add(1, Ordering::Relaxed);
                    let Some(file) = plan.files.get(i) else { break };
                    let outcome = if control.cancel.load(Ordering::Relaxed) {
                        FileOutcome { status: Status::NotRun("interrupted"), elapsed: Duration::ZERO }
                    } else if stop.load(Ordering::Relaxed) {
                        FileOutcome {
                            status: Status::NotRun("stopped by --fail-fast"),
                            elapsed: Duration::ZERO,
                        }
                    } else {
                        run_one(file, pipeline, options, batch, control)
                    };
                    if batch.fail_fast && matches!(outcome.status, Status::Failed(_)) {
                        stop.store(true, Ordering::Relaxed);
                    }
                    observe(file, &outcome);
                    if let Ok(mut r) = results.lock() {
                        r[i] = Some(outcome);
                    }
                }
            });
        }
    });
    let results = results.into_inner().unwrap_or_else(|poison| poison.into_inner());
    results
        .into_iter()
        .map(|r| r.unwrap_or(FileOutcome { status: Status::NotRun("interrupted"), elapsed: Duration::ZERO }))
        .collect()
}

fn run_one(
    file: &PlannedFile,
    pipeline: &Pipeline,
    options: &RunOptions,
    batch: &BatchOptions,
    control: &Control,
) -> FileOutcome {
    let start = Instant::now();
    let overwrite = match file.action {
        Action::Skip(reason) => {
            return FileOutcome { status: Status::Skipped(reason), elapsed: Duration::ZERO };
        }
        Action::Run { overwrite } => overwrite,
    };
    let status = match catch_unwind(AssertUnwindSafe(|| {
        run_job(file, pipeline, options, batch, control, overwrite)
    })) {
        Ok(status) => status,
        Err(_) => Status::Failed(
            "internal error: a step failed unexpectedly; nothing was written (please report this)".into(),
        ),
    };
    FileOutcome { status, elapsed: start.elapsed() }
}

fn run_job(
    file: &PlannedFile,
    pipeline: &Pipeline,
    options: &RunOptions,
    batch: &BatchOptions,
    control: &Control,
    overwrite: bool,
) -> Status {
    if let Some(dir) = file.output.parent()
        && !dir.as_os_str().is_empty()
        && let Err(e) = std::fs::create_dir_all(dir)
    {
        return Status::Failed(format!("cannot make the output folder `{}`: {e}", dir.display()));
    }
    let input = Location::Path(file.input.path.clone());
    let output = Location::Path(file.output.clone());
    let job = match Job::plan(input, output, pipeline, options, overwrite) {
        Ok(j) => j,
        Err(e) => return Status::Failed(e.to_string()),
    };
    let page_name;
    let job = match &file.pages {
        Some(names) => {
            page_name = |page: usize| names.path(page).map_err(Error::Recipe);
            job.one_file_per_page(&page_name)
        }
        None => job,
    };
    match job.run_unless(&|| control.cancel.load(Ordering::Relaxed)) {
        Ok(summary) => {
            if batch.sidecar
                && let Err(e) = report::write_sidecar(file, &summary, pipeline, options)
            {
                return Status::Failed(format!(
                    "the output was written but its processing record was not: {e}"
                ));
            }
            Status::Done(Box::new(summary))
        }
        Err(e) if matches!(&e.error, Error::Io(io) if io.kind() == std::io::ErrorKind::Interrupted) => {
            Status::NotRun("interrupted")
        }
        Err(e) => Status::Failed(e.to_string()),
    }
}
