//! Folders of images: `batch` (each image its own palette, or one shared palette),
//! `learn` (a palette from many images or histogram files), the histogram file format
//! that lets a large archive be summarised in shards, the batch report and the review page.

mod review;

pub use review::{review_page, REVIEW_FOLDER, REVIEW_PAGE, THUMBNAIL_SIDE};

use crate::error::{Error, Result};
pub use crate::features::histogram_file::{
    decode as decode_histogram, encode as encode_histogram, histogram_of_file, input_files,
    HIST_MAGIC,
};
use crate::features::histogram_file::{
    merge_as_they_arrive, pool as pool_histograms, read_input, Pooled,
};
use crate::output::DocumentHeader;
use crate::output::{stem_of, SourceStamp};
use crate::output::{OutputSet, TEMP_PREFIX};
pub use crate::raster::walk::{collect_images, walk_images, IMAGE_EXTENSIONS};
use crate::reduce::{self, FixedPalette, PaletteDocument, ReduceOptions};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::time::Instant;

/// The pixels every image stands for in a shared palette with `equal_weight`: more than
/// most photographs hold, so counts are scaled up, not rounded away.
pub const EQUAL_WEIGHT_PIXELS: u64 = 1 << 24;

/// Name of the shared palette written by `batch --shared`.
pub const SHARED_PALETTE: &str = "shared.palette.json";

/// Outcome of one file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Reduced now.
    Ok,
    /// Outputs were already up to date.
    Skipped,
    /// Could not be reduced (see `error`).
    Failed,
    /// Not started because the run was interrupted.
    Interrupted,
}

/// One row of the batch report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FileReport {
    /// Path relative to the input folder.
    pub input: String,
    pub status: Status,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error: Option<String>,
    pub colors: Option<usize>,
    pub mean_delta_e2000: Option<f64>,
    /// 95th and 99th percentiles of the image's per-pixel CIEDE2000 (as in its palette
    /// document); absent in reports written before they were recorded.
    #[serde(default)]
    pub p95_delta_e2000: Option<f64>,
    #[serde(default)]
    pub p99_delta_e2000: Option<f64>,
    pub seconds: f64,
    /// What `reduce` would have said about this image: remarks, then problems to act on
    /// (colours lost); absent when there are none.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

/// Totals of a batch.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Totals {
    pub files: usize,
    pub ok: usize,
    pub skipped: usize,
    pub failed: usize,
    pub interrupted: usize,
    pub not_images: usize,
    pub seconds: f64,
}

/// `batch-report.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BatchReport {
    /// Tool version, input, seed and every engine setting.
    #[serde(flatten)]
    pub header: DocumentHeader,
    /// The one palette every image was mapped onto: `shared.palette.json` (`--shared`) or
    /// the `--palette` file as named; null when each image has its own.
    pub shared_palette: Option<String>,
    /// True when every image weighed the same in the shared palette (`equal_weight`).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub equal_weight: bool,
    /// That palette's file, SHA-256 and size.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub given_palette: Option<reduce::GivenPalette>,
    /// Settings that were given but a given palette makes meaningless (`--palette`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub not_applied: Vec<String>,
    pub files: Vec<FileReport>,
    pub skipped_not_images: Vec<String>,
    pub totals: Totals,
}

/// Settings of a batch.
#[derive(Debug, Clone)]
pub struct BatchOptions {
    pub reduce: ReduceOptions,
    /// One palette for all images, fitted on their merged histograms.
    pub shared: bool,
    /// With `shared`: every image weighs the same in the shared palette (its histogram
    /// scaled to [`EQUAL_WEIGHT_PIXELS`]), not in proportion to its pixels.
    pub equal_weight: bool,
    /// Images processed at once (worker threads). Default: the number of cores.
    pub jobs: usize,
    /// Redo images whose outputs are up to date.
    pub force: bool,
    /// Also write the review page (`review.html` and its thumbnails in `review/`).
    pub review_page: bool,
    /// Map every image onto this palette instead of fitting (`batch --palette`).
    pub palette: Option<FixedPalette>,
    /// The file `palette` was read from: no output may replace it.
    pub palette_file: Option<PathBuf>,
}

/// `path` with symbolic links and `..` resolved, also when its last parts do not exist yet.
fn resolved(path: &Path) -> PathBuf {
    let abs = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    let mut existing = abs.clone();
    let mut rest = Vec::new();
    while !existing.exists() {
        match (
            existing.file_name().map(|n| n.to_os_string()),
            existing.parent(),
        ) {
            (Some(n), Some(p)) => {
                rest.push(n);
                existing = p.to_path_buf();
            }
            _ => break,
        }
    }
    let mut out = std::fs::canonicalize(&existing).unwrap_or(existing);
    for n in rest.into_iter().rev() {
        out.push(n);
    }
    out
}

/// Refuses an output folder inside (or equal to) the input folder.
pub fn check_out_not_inside(input_dir: &Path, out: &Path) -> Result<()> {
    let i = resolved(input_dir);
    let o = resolved(out);
    if o.starts_with(&i) {
        return Err(Error::output(
            out,
            format!(
                "the output folder is inside the input folder {}; choose one outside it",
                input_dir.display()
            ),
        ));
    }
    Ok(())
}

/// Refuses a batch whose mirrored outputs would land inside its own input tree: with the
/// output folder holding the input folder (`batch P/in -o P`), the outputs of `P/in/in/x.png`
/// would go to `P/in/`, and the next run would take them for inputs.
pub fn check_outputs_outside_input(input_dir: &Path, out: &Path, images: &[PathBuf]) -> Result<()> {
    let i = resolved(input_dir);
    let o = resolved(out);
    let Ok(inside) = i.strip_prefix(&o) else {
        return Ok(());
    };
    for img in images {
        let rel = img.strip_prefix(input_dir).unwrap_or(img);
        let folder = rel.parent().unwrap_or(Path::new(""));
        if folder.starts_with(inside) {
            return Err(Error::output(
                out,
                format!(
                    "the outputs of {} would be written inside the input folder {}; choose an \
                     output folder that does not hold the input folder",
                    img.display(),
                    input_dir.display()
                ),
            ));
        }
    }
    Ok(())
}

/// File in the output folder that marks a running batch.
pub const LOCK_NAME: &str = ".chromasift-batch.lock";

/// The lock of a batch's output folder: holds this process's id, removed when dropped.
#[derive(Debug)]
pub struct OutputLock(PathBuf);

impl OutputLock {
    /// Takes the lock of `out`. Another running batch's lock is refused; a lock whose
    /// process no longer runs (left by a killed batch) is taken over.
    pub fn take(out: &Path) -> Result<OutputLock> {
        let path = out.join(LOCK_NAME);
        let me = std::process::id();
        // The lock appears with its process id already in it (a file written aside, then
        // linked into place), so no other batch can find it empty and take it for stale.
        let mine = out.join(format!("{LOCK_NAME}.{me}"));
        std::fs::write(&mine, format!("{me}\n"))
            .map_err(|e| Error::output(out, format!("cannot create {LOCK_NAME}: {e}")))?;
        let taken = (|| {
            for _ in 0..2 {
                match std::fs::hard_link(&mine, &path) {
                    Ok(()) => return Ok(OutputLock(path.clone())),
                    Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                        let holder = std::fs::read_to_string(&path)
                            .ok()
                            .and_then(|t| t.trim().parse::<u32>().ok());
                        if let Some(pid) = holder.filter(|&pid| pid != me && process_runs(pid)) {
                            return Err(Error::output(
                                out,
                                format!(
                                    "another batch (process {pid}) is writing into this folder; \
                                     wait for it to finish, or remove {LOCK_NAME} there if none \
                                     runs"
                                ),
                            ));
                        }
                        // Stale: its process has ended.
                        let _ = std::fs::remove_file(&path);
                    }
                    Err(e) => {
                        return Err(Error::output(
                            out,
                            format!("cannot create {LOCK_NAME}: {e}"),
                        ))
                    }
                }
            }
            Err(Error::output(out, format!("cannot take {LOCK_NAME}")))
        })();
        let _ = std::fs::remove_file(&mine);
        taken
    }
}

impl Drop for OutputLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// Whether a process with this id runs (on Unix; elsewhere assumed to).
fn process_runs(pid: u32) -> bool {
    #[cfg(unix)]
    {
        // SAFETY: signal 0 only checks that the process exists.
        let r = unsafe { libc::kill(pid as libc::pid_t, 0) };
        r == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM)
    }
    #[cfg(not(unix))]
    {
        let _ = pid;
        true
    }
}

/// Workers a batch may run: the jobs asked for, at most twice the cores and one per 256 MB
/// of available memory (a worker holds its image, outputs and a 64 MiB colour table).
pub fn worker_count(jobs: usize) -> usize {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let by_memory = available_memory().map_or(usize::MAX, |b| (b / (256 << 20)).max(1) as usize);
    jobs.clamp(1, MAX_JOBS).min(cores * 2).min(by_memory)
}

/// MemAvailable from /proc/meminfo, in bytes (Linux).
fn available_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// Removes temporary files left by an interrupted earlier run.
pub fn remove_stale_temporaries(out: &Path) {
    let mut stack = vec![out.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(rd) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in rd.flatten() {
            let p = e.path();
            match e.file_type() {
                Ok(t) if t.is_dir() => stack.push(p),
                Ok(t)
                    if t.is_file() && e.file_name().to_string_lossy().starts_with(TEMP_PREFIX) =>
                {
                    let _ = std::fs::remove_file(p);
                }
                _ => {}
            }
        }
    }
}

/// The name each image's outputs start with: its file stem (`x` for `x.png`), or its
/// whole file name (`x.png`, `x.tif`) where images in one folder share a stem (ignoring
/// case), so that no image's outputs overwrite another's. Applied again until no two names in a folder
/// agree (a whole name can equal another file's stem: `x.png` and `x.png.jpg`). `None`
/// for a file name no output name can be made from.
pub fn output_stems(images: &[PathBuf]) -> Vec<Option<String>> {
    let whole = |p: &PathBuf| p.file_name().map(|n| n.to_string_lossy().into_owned());
    let mut stems: Vec<Option<String>> = images.iter().map(|p| stem_of(p).ok()).collect();
    let mut use_whole = vec![false; images.len()];
    loop {
        // Compared without case: on case-insensitive file systems `X.png` and `x.jpg`
        // would write the same files.
        let mut seen: std::collections::HashMap<(Option<&Path>, String), usize> =
            std::collections::HashMap::new();
        for (p, s) in images.iter().zip(&stems) {
            if let Some(s) = s {
                *seen.entry((p.parent(), s.to_lowercase())).or_default() += 1;
            }
        }
        let clash: Vec<usize> = (0..images.len())
            .filter(|&i| {
                !use_whole[i]
                    && stems[i]
                        .as_deref()
                        .is_some_and(|s| seen[&(images[i].parent(), s.to_lowercase())] > 1)
            })
            .collect();
        if clash.is_empty() {
            return stems;
        }
        for i in clash {
            use_whole[i] = true;
            stems[i] = whole(&images[i]);
        }
    }
}

/// Are the outputs of `input` in `out_dir`, named from `stem`, complete and made from this
/// file with these settings?
pub fn up_to_date(
    input: &Path,
    stem: &str,
    out_dir: &Path,
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
) -> bool {
    let names = reduce::output_names(stem);
    let needed = if opts.uncertainty_raw { 5 } else { 4 };
    if !names[..needed].iter().all(|n| out_dir.join(n).is_file()) {
        return false;
    }
    if opts.loss_map
        && !reduce::loss_names(stem)
            .iter()
            .all(|n| out_dir.join(n).is_file())
    {
        return false;
    }
    let Ok(bytes) = std::fs::read(out_dir.join(&names[1])) else {
        return false;
    };
    let Ok(doc) = serde_json::from_slice::<PaletteDocument>(&bytes) else {
        return false;
    };
    doc.settings_fingerprint.as_deref() == Some(opts.fingerprint(fixed).as_str())
        && doc.source.is_some()
        && doc.source == SourceStamp::of(input)
}

/// Most worker threads of a batch (`--jobs`).
pub const MAX_JOBS: usize = 256;

/// Progress callback: (done, total).
pub type Progress<'a> = &'a (dyn Fn(usize, usize) + Sync);

/// Reduces one image of a batch into `out_dir` under `stem`, unless one of its outputs
/// would replace a file the batch reads or skips (`inputs`, canonical paths: the output
/// folder may hold the input folder, as in `batch photos -o .`).
fn reduce_one(
    input: &Path,
    stem: &str,
    out_dir: &Path,
    inputs: &std::collections::HashSet<PathBuf>,
    opts: &BatchOptions,
    fixed: Option<&FixedPalette>,
) -> Result<reduce::ReduceReport> {
    for name in reduce::output_names(stem)
        .into_iter()
        .chain(reduce::loss_names(stem))
    {
        let target = out_dir.join(name);
        if std::fs::canonicalize(&target).is_ok_and(|c| inputs.contains(&c)) {
            return Err(Error::output(
                &target,
                "this output would overwrite an input file of the batch",
            ));
        }
    }
    let run = reduce::FileRun {
        fixed,
        stamp: true,
        spare: &[],
        stem: Some(stem),
    };
    reduce::reduce_file_run(input, out_dir, &opts.reduce, &run)
}

/// Learns the shared palette from the pooled histograms and writes `shared.palette.json`,
/// which records how each image's colours were read.
fn shared_palette(pooled: Pooled, out: &Path, opts: &ReduceOptions) -> Result<FixedPalette> {
    let mut doc = reduce::learn_palette(&pooled.histogram, opts)?;
    doc.input_profiles = pooled.inputs;
    let mut set = OutputSet::prepare(out, &[])?;
    let json = serde_json::to_string_pretty(&doc).expect("document serialises");
    let bytes = format!("{json}\n");
    set.write_bytes(SHARED_PALETTE, bytes.as_bytes())?;
    set.commit()?;
    let mut fixed = FixedPalette::from_document(&doc).map_err(Error::Data)?;
    fixed.origin = Some(reduce::GivenPalette::of_bytes(
        SHARED_PALETTE,
        bytes.as_bytes(),
        fixed.colours.len(),
    ));
    fixed.learnt_in_run = true;
    Ok(fixed)
}

/// Runs a batch over `input_dir` into `out` (see the `batch` command).
pub fn run_batch(
    input_dir: &Path,
    out: &Path,
    opts: &BatchOptions,
    stop: &AtomicBool,
    progress: Progress,
) -> Result<BatchReport> {
    let t0 = Instant::now();
    opts.reduce.kmeans_params().check()?;
    check_out_not_inside(input_dir, out)?;
    let (images, others, unreadable) = walk_images(input_dir)?;
    if images.is_empty() && unreadable.is_empty() {
        return Err(Error::Data(format!(
            "{}: no images found (looked for .{} files, in sub-folders too); nothing written",
            input_dir.display(),
            IMAGE_EXTENSIONS.join(", .")
        )));
    }
    check_outputs_outside_input(input_dir, out, &images)?;
    std::fs::create_dir_all(out)
        .map_err(|e| Error::output(out, format!("cannot create output folder: {e}")))?;
    // A folder that cannot be written fails now, not after every image was reduced.
    drop(OutputSet::prepare(out, &[])?);
    // One batch at a time per output folder: two would mix their results.
    let _lock = OutputLock::take(out)?;
    remove_stale_temporaries(out);
    // Many images: keep each worker's colour-count table from image to image.
    let _keep = crate::features::histogram::KeepTables::new();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(worker_count(opts.jobs))
        .build()
        .map_err(|e| Error::Data(format!("cannot start worker threads: {e}")))?;
    let rel = |p: &Path| {
        p.strip_prefix(input_dir)
            .unwrap_or(p)
            .to_string_lossy()
            .into_owned()
    };
    let done = AtomicUsize::new(0);
    let mut early_failures: Vec<Option<String>> = vec![None; images.len()];

    // Shared palette: merge every image's histogram, fit once.
    let fixed = if let Some(p) = &opts.palette {
        Some(p.clone())
    } else if opts.shared {
        // Histograms are merged as they arrive (see `squash`), so memory stays bounded
        // however many images the folder holds.
        let gathered = pool.install(|| {
            merge_as_they_arrive(&images, |p: &PathBuf| {
                if stop.load(Ordering::Relaxed) {
                    Err(Error::Data("interrupted".into()))
                } else {
                    let (mut h, records) = read_input(p, &opts.reduce.limits, rel(p))?;
                    if opts.equal_weight {
                        h.rescale_total(EQUAL_WEIGHT_PIXELS);
                    }
                    Ok((h, records))
                }
            })
        });
        if stop.load(Ordering::Relaxed) {
            // Interrupted while reading: no palette from part of the images; every image
            // is reported as interrupted below.
            None
        } else {
            for (i, e) in &gathered.failures {
                early_failures[*i] = Some(one_line(&e.to_string()));
            }
            if gathered.parts.is_empty() {
                return Err(Error::Data(format!(
                    "{}: no image could be read to learn a shared palette",
                    input_dir.display()
                )));
            }
            let pooled = pool_histograms(gathered, |i| images[i].clone())?;
            Some(shared_palette(pooled, out, &opts.reduce)?)
        }
    } else {
        None
    };
    // Every file a batch reads or skips, and its `--palette` document: no output may
    // replace one (see `reduce_one`).
    let inputs: std::collections::HashSet<PathBuf> = images
        .iter()
        .chain(&others)
        .chain(opts.palette_file.as_ref())
        .filter_map(|p| std::fs::canonicalize(p).ok())
        .collect();

    let total = images.len();
    let stems = output_stems(&images);
    let rows: Vec<FileReport> = pool.install(|| {
        images
            .par_iter()
            .enumerate()
            .map(|(i, p)| {
                let t = Instant::now();
                let input = rel(p);
                let row = |status, error, doc: Option<&PaletteDocument>| FileReport {
                    input: input.clone(),
                    status,
                    error,
                    colors: doc.map(|d| d.k),
                    mean_delta_e2000: doc.map(|d| d.mean_delta_e2000),
                    p95_delta_e2000: doc.and_then(|d| d.p95_delta_e2000),
                    p99_delta_e2000: doc.and_then(|d| d.p99_delta_e2000),
                    seconds: t.elapsed().as_secs_f64(),
                    notes: Vec::new(),
                    warnings: Vec::new(),
                };
                let r = if let Some(e) = &early_failures[i] {
                    row(Status::Failed, Some(e.clone()), None)
                } else if stop.load(Ordering::Relaxed) {
                    row(Status::Interrupted, None, None)
                } else {
                    let sub = p
                        .parent()
                        .and_then(|d| d.strip_prefix(input_dir).ok())
                        .unwrap_or(Path::new(""));
                    let out_dir = out.join(sub);
                    let stem = stems[i].as_deref();
                    if !opts.force
                        && stem.is_some_and(|s| {
                            up_to_date(p, s, &out_dir, &opts.reduce, fixed.as_ref())
                        })
                    {
                        let doc: Option<PaletteDocument> = stem
                            .and_then(|s| {
                                std::fs::read(out_dir.join(format!("{s}.palette.json"))).ok()
                            })
                            .and_then(|b| serde_json::from_slice(&b).ok());
                        // The lost colours its document lists are still worth a warning.
                        let warnings = doc
                            .as_ref()
                            .and_then(|d| {
                                crate::families::lost_areas_warning(
                                    &d.lost_areas,
                                    d.given_palette.is_some(),
                                )
                            })
                            .into_iter()
                            .collect();
                        FileReport {
                            warnings,
                            ..row(Status::Skipped, None, doc.as_ref())
                        }
                    } else {
                        let reduced = match stem {
                            Some(s) => reduce_one(p, s, &out_dir, &inputs, opts, fixed.as_ref()),
                            None => Err(Error::output(
                                p,
                                "cannot derive an output name from this file name",
                            )),
                        };
                        match reduced {
                            Ok(rep) => FileReport {
                                notes: rep.notes,
                                warnings: rep.warnings,
                                ..row(Status::Ok, None, Some(&rep.document))
                            },
                            Err(e) => row(Status::Failed, Some(one_line(&e.to_string())), None),
                        }
                    }
                };
                progress(done.fetch_add(1, Ordering::Relaxed) + 1, total);
                r
            })
            .collect()
    });
    let mut rows = rows;
    let mut sheet_stems = stems.clone();
    sheet_stems.resize(rows.len() + unreadable.len(), None);
    rows.extend(unreadable.iter().map(|(d, e)| FileReport {
        input: rel(d),
        status: Status::Failed,
        error: Some(one_line(&e.to_string())),
        colors: None,
        mean_delta_e2000: None,
        p95_delta_e2000: None,
        p99_delta_e2000: None,
        seconds: 0.0,
        notes: Vec::new(),
        warnings: Vec::new(),
    }));
    let count = |s: Status| rows.iter().filter(|r| r.status == s).count();
    // With `--palette` the engine only maps: record what applied, and what did not.
    let given = opts.palette.as_ref();
    let report = BatchReport {
        header: DocumentHeader::new(None, reduce::engine_used(&opts.reduce, given.is_some())),
        shared_palette: match (&opts.palette_file, opts.shared) {
            (Some(f), _) => Some(f.to_string_lossy().into_owned()),
            (None, true) => Some(SHARED_PALETTE.to_string()),
            (None, false) => None,
        },
        equal_weight: opts.shared && opts.equal_weight,
        given_palette: fixed.as_ref().and_then(|f| f.origin.clone()),
        not_applied: given
            .map(|p| reduce::not_applied(&opts.reduce, p))
            .unwrap_or_default(),
        skipped_not_images: others.iter().map(|p| rel(p)).collect(),
        totals: Totals {
            files: rows.len(),
            ok: count(Status::Ok),
            skipped: count(Status::Skipped),
            failed: count(Status::Failed),
            interrupted: count(Status::Interrupted),
            not_images: others.len(),
            seconds: t0.elapsed().as_secs_f64(),
        },
        files: rows,
    };
    let spare: Vec<&Path> = opts.palette_file.as_deref().into_iter().collect();
    let mut set = OutputSet::prepare(out, &spare)?;
    let json = serde_json::to_string_pretty(&report).expect("report serialises");
    set.write_bytes("batch-report.json", format!("{json}\n").as_bytes())?;
    set.write_bytes("batch-report.csv", report_csv(&report).as_bytes())?;
    if opts.review_page {
        let html = pool.install(|| {
            review::review_page(&report, &sheet_stems, input_dir, out, &opts.reduce.limits)
        })?;
        set.write_bytes(review::REVIEW_PAGE, html.as_bytes())?;
    }
    set.commit()?;
    Ok(report)
}

/// A message on one line (decoder messages sometimes hold line breaks).
pub fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// `batch-report.csv`: a header and one row per file, all of one shape (the totals are
/// in `batch-report.json`, under `totals`).
pub fn report_csv(r: &BatchReport) -> String {
    let mut s = String::from(
        "input,status,error,colors,mean_delta_e2000,p95_delta_e2000,p99_delta_e2000,seconds\n",
    );
    let de = |d: Option<f64>| d.map(|d| format!("{d:.4}")).unwrap_or_default();
    for f in &r.files {
        s.push_str(&format!(
            "{},{},{},{},{},{},{},{:.3}\n",
            csv_field(&f.input),
            serde_json::to_value(f.status).unwrap().as_str().unwrap(),
            csv_field(f.error.as_deref().unwrap_or("")),
            f.colors.map(|c| c.to_string()).unwrap_or_default(),
            de(f.mean_delta_e2000),
            de(f.p95_delta_e2000),
            de(f.p99_delta_e2000),
            f.seconds
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::features::histogram::Histogram;

    fn sample() -> Histogram {
        Histogram {
            depth: 8,
            colours: vec![[0, 0, 1], [3, 2, 1], [255, 0, 0]],
            counts: vec![5, 1, 9],
            ..Histogram::default()
        }
    }

    #[test]
    fn histogram_file_round_trip() {
        let h = sample();
        let bytes = encode_histogram(&h);
        assert_eq!(bytes.len(), 32 + 3 * 14);
        assert_eq!(decode_histogram(&bytes, Path::new("a.hist")).unwrap(), h);
    }

    #[test]
    fn corrupt_or_foreign_histogram_files_are_refused() {
        let good = encode_histogram(&sample());
        let p = Path::new("part.hist");
        let check = |b: &[u8], m: &str| {
            let e = decode_histogram(b, p).unwrap_err().to_string();
            assert!(e.contains("part.hist") && e.contains(m), "{e}");
        };
        check(b"PNG....", "first bytes");
        let mut v = good.clone();
        v[7] = 4;
        check(&v, "version 4");
        check(&good[..good.len() - 3], "size");
        let mut v = good.clone();
        v[30] ^= 1;
        check(&v, "checksum");
        let mut v = good.clone();
        v[8] = 12;
        check(&v, "depth");
    }

    #[test]
    fn images_sharing_a_stem_are_named_by_their_whole_file_names() {
        let paths: Vec<PathBuf> = [
            "a/x.png",
            "a/x.tif",
            "a/y.png",
            "a/x.png.jpg",
            "a/x.png.jpg.gif",
            "b/x.png",
            "a/z",
            "c/Q.png",
            "c/q.jpg",
        ]
        .iter()
        .map(PathBuf::from)
        .collect();
        let stems = output_stems(&paths);
        let want = [
            "x.png",
            "x.tif",
            "y",
            "x.png.jpg",
            "x.png.jpg.gif",
            "x",
            "z",
            "Q.png",
            "q.jpg",
        ];
        assert_eq!(
            stems,
            want.iter().map(|s| Some(s.to_string())).collect::<Vec<_>>()
        );
    }
}
