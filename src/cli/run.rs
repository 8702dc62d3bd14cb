//! Dispatch: each command's library call, its summary on standard error, its document on
//! standard output, and the exit status.

use super::help::{flag_wording, manual_pages, parse, usage_error};
use super::stdio::{
    emit, emit_json, read_stdin, set_stdout_closed_at_start, shown, shown_path, stdin_to_file,
    stdout_result, write_or_stdout, write_stdout, STDOUT_FAILED,
};
use super::{
    ApplyArgs, BatchArgs, Cli, Command, HistogramArgs, LearnArgs, ManpageArgs, ReduceArgs,
};
use crate::error::Error;
use crate::{batch, features, learn, reduce, separate, sweep};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};

/// Exit codes: 0 success, 1 some inputs failed (batches), 2 usage or input error.
const EXIT_USAGE: u8 = 2;
/// Exit code when some inputs of a batch failed.
const EXIT_SOME_FAILED: u8 = 1;
/// Exit code after Ctrl-C (128 + SIGINT).
const EXIT_INTERRUPTED: u8 = 130;

static STOP: AtomicBool = AtomicBool::new(false);

fn fail(message: impl std::fmt::Display) -> ExitCode {
    eprintln!(
        "chromasift: error: {}",
        flag_wording(&shown(&batch::one_line(&message.to_string())))
    );
    ExitCode::from(EXIT_USAGE)
}

/// `n` and the word, the word with an `s` unless `n` is 1 ("1 colour", "12 colours").
fn counted(n: impl Into<u64>, word: &str) -> String {
    let n = n.into();
    format!("{n} {word}{}", if n == 1 { "" } else { "s" })
}

fn note(input: &Path, n: &str) {
    eprintln!(
        "chromasift: note: {}: {}",
        shown_path(input),
        flag_wording(&shown(n))
    );
}

/// Runs the tool on its command line. `stdout_closed_at_start`: standard output was closed
/// when the process started (the binary records it before the runtime hides it).
pub fn run(stdout_closed_at_start: bool) -> ExitCode {
    set_stdout_closed_at_start(stdout_closed_at_start);
    let code = dispatch(std::env::args_os().collect());
    if STDOUT_FAILED.load(Ordering::SeqCst) {
        return ExitCode::from(EXIT_USAGE);
    }
    code
}

fn dispatch(argv: Vec<std::ffi::OsString>) -> ExitCode {
    #[cfg(unix)]
    ignore_file_size_signal();
    let cli = match parse(&argv) {
        Ok(c) => c,
        Err(e) => {
            use clap::error::ErrorKind as K;
            if matches!(e.kind(), K::DisplayHelp | K::DisplayVersion) {
                stdout_result(e.print());
                return ExitCode::SUCCESS;
            }
            if e.kind() == K::DisplayHelpOnMissingArgumentOrSubcommand {
                // No command given: the help goes to standard error, and it is a usage error.
                let _ = e.print();
                return ExitCode::from(EXIT_USAGE);
            }
            let words: Vec<String> = argv
                .iter()
                .map(|a| a.to_string_lossy().into_owned())
                .collect();
            return fail(usage_error(&e, &words));
        }
    };
    if !matches!(cli.command, Command::Batch(_)) {
        // Ctrl-C or SIGTERM: remove the temporary files being written and stop (a batch
        // has its own handler, which finishes the images under way and writes its report).
        let _ = ctrlc::set_handler(|| {
            eprintln!("chromasift: interrupted; unfinished outputs removed");
            crate::output::abandon_and_exit(130);
        });
    }
    if let Err(message) = check_standard_streams(&cli.command) {
        return fail(message);
    }
    // `-` as the input of a command that reads one image or scene: standard input, held in
    // a temporary file named `stdin.*` (so outputs are named stdin.*) for the run.
    let mut cli = cli;
    let stdin_input = match &mut cli.command {
        Command::Separate(a) => Some(&mut a.input),
        Command::Landcover(a) => Some(&mut a.input),
        Command::Sweep(a) => Some(&mut a.input),
        Command::Apply(a) => Some(&mut a.input),
        _ => None,
    };
    let _stdin_file = match stdin_input.filter(|p| p.as_os_str() == "-") {
        Some(input) => match stdin_to_file() {
            Ok((dir, path)) => {
                *input = path;
                Some(dir)
            }
            Err(e) => return fail(e),
        },
        None => None,
    };
    let result = match cli.command {
        Command::Reduce(args) => run_reduce(&args),
        Command::Separate(args) => run_separate(&args),
        Command::Landcover(args) => super::landcover::run_landcover(&args),
        Command::LandcoverSample(args) => super::landcover::run_sample(&args),
        Command::LandcoverFit(args) => super::landcover::run_fit(&args),
        Command::LandcoverAssess(args) => super::landcover::run_assess(&args),
        Command::LandcoverLabel(args) => super::landcover::run_label(&args),
        Command::Sweep(args) => run_sweep(&args),
        Command::Batch(args) => return run_batch(args),
        Command::Learn(args) => run_learn(&args),
        Command::Apply(args) => run_apply(&args),
        Command::Histogram(args) => run_histogram(&args),
        Command::Completions(args) => {
            use clap::CommandFactory;
            let mut script = Vec::new();
            clap_complete::generate(args.shell, &mut Cli::command(), "chromasift", &mut script);
            let mut out = std::io::stdout().lock();
            stdout_result(out.write_all(&script).and_then(|()| out.flush()));
            Ok(ExitCode::SUCCESS)
        }
        Command::Manpage(args) => run_manpage(&args),
    };
    result.unwrap_or_else(fail)
}

/// Standard input can be read once, and standard output holds one thing.
fn check_standard_streams(command: &Command) -> Result<(), String> {
    let twice = match command {
        Command::Separate(a) => a.input.as_os_str() == "-" && a.inks.as_os_str() == "-",
        Command::Apply(a) => a.input.as_os_str() == "-" && a.palette.as_os_str() == "-",
        _ => false,
    };
    if twice {
        return Err(
            "standard input (-) can hold the image or the second input file, not both".into(),
        );
    }
    let json_twice = match command {
        Command::Learn(a) => a.out.as_os_str() == "-" && a.json,
        Command::Histogram(a) => a.out.as_os_str() == "-" && a.json,
        _ => false,
    };
    if json_twice {
        return Err(
            "--json cannot be combined with -o - (standard output already holds the output)".into(),
        );
    }
    Ok(())
}

fn print_reduce_summary(input: &Path, report: &reduce::ReduceReport, json: bool) {
    for n in &report.notes {
        note(input, n);
    }
    for w in &report.warnings {
        eprintln!(
            "chromasift: warning: {}: {}",
            input.display(),
            flag_wording(w)
        );
    }
    let d = &report.document;
    eprintln!(
        "chromasift: {}: {}, {}, SSE {:.6e}, mean ΔE2000 {:.3}, {:.2} s",
        input.display(),
        counted(d.k as u64, "colour"),
        counted(d.iterations as u64, "iteration"),
        d.sse,
        d.mean_delta_e2000,
        report.seconds
    );
    if json {
        emit_json(d);
    }
}

fn run_reduce(args: &ReduceArgs) -> Result<ExitCode, Error> {
    let report = if args.input.as_os_str() == "-" || args.stdout.is_some() {
        reduce_stream(args)?
    } else {
        reduce::reduce_file(&args.input, &args.output.out, &args.options())?
    };
    print_reduce_summary(&args.input, &report, args.output.json);
    Ok(ExitCode::SUCCESS)
}

/// `reduce` with standard input (`-`) as input and/or one output on standard output.
fn reduce_stream(args: &ReduceArgs) -> Result<reduce::ReduceReport, Error> {
    let t0 = std::time::Instant::now();
    let opts = args.options();
    let from_stdin = args.input.as_os_str() == "-";
    let (name, bytes) = if from_stdin {
        (
            PathBuf::from("standard input"),
            read_stdin(opts.limits.max_alloc)?,
        )
    } else {
        let bytes = std::fs::read(&args.input).map_err(|source| Error::Open {
            path: args.input.clone(),
            source,
        })?;
        (args.input.clone(), bytes)
    };
    let mut red = reduce::reduce_bytes(&bytes, &name, &opts)?;
    drop(bytes);
    if !from_stdin {
        red.document.header.input = args
            .input
            .file_name()
            .map(|n| n.to_string_lossy().into_owned());
    }
    let outputs = match args.stdout {
        Some(which) => {
            write_stdout(&reduce::encode_one(&red, which))?;
            Vec::new()
        }
        None => {
            let mut set = crate::output::OutputSet::prepare(&args.output.out, &[])?;
            reduce::write_reduction(&red, "stdin", &mut set, opts.uncertainty_raw, opts.loss_map)?;
            set.commit()?
        }
    };
    Ok(reduce::ReduceReport {
        input: name,
        outputs,
        document: red.document,
        notes: red.notes,
        warnings: red.warnings,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

fn run_separate(args: &super::SeparateArgs) -> Result<ExitCode, Error> {
    let report =
        separate::separate_file(&args.input, &args.inks, &args.output.out, &args.options())?;
    for n in &report.document.notes {
        note(&args.input, n);
    }
    eprintln!("{}", separate::summary_table(&report.document));
    eprintln!(
        "chromasift: {}: {} plates written in {:.2} s",
        shown_path(&args.input),
        report.document.inks.len(),
        report.seconds
    );
    if args.output.json {
        emit_json(&report.document);
    }
    Ok(ExitCode::SUCCESS)
}

fn run_sweep(args: &super::SweepArgs) -> Result<ExitCode, Error> {
    let report = sweep::sweep_file(&args.input, &args.rest.output.out, &args.options())?;
    for n in &report.notes {
        note(&args.input, n);
    }
    let d = &report.document;
    let suggested: Vec<String> = d
        .suggested
        .iter()
        .map(|(c, k)| format!("{c} K = {k}"))
        .collect();
    eprintln!(
        "chromasift: {}: swept K {}..{}; suggested: {}; {:.2} s",
        shown_path(&args.input),
        d.rows.first().map_or(0, |r| r.k),
        d.rows.last().map_or(0, |r| r.k),
        if suggested.is_empty() {
            "none".to_string()
        } else {
            suggested.join(", ")
        },
        report.seconds
    );
    if let Some(r) = &d.recommended {
        eprintln!(
            "chromasift: {}: recommended K = {} (rule: {}); {}. {}",
            shown_path(&args.input),
            r.k,
            r.rule,
            r.agreement,
            r.reason
        );
    }
    if args.rest.output.json {
        emit_json(d);
    }
    Ok(ExitCode::SUCCESS)
}

fn run_learn(args: &LearnArgs) -> Result<ExitCode, Error> {
    let opts = args.options();
    let learnt = learn::learn(&args.inputs, &opts)?;
    let failed = report_failures(&learnt.failures);
    profile_notes(&learnt.document.input_profiles);
    let json = serde_json::to_string_pretty(&learnt.document).expect("document serialises");
    write_or_stdout(&args.out, format!("{json}\n").as_bytes(), &learnt.read)?;
    let doc = &learnt.document;
    eprintln!(
        "chromasift: learned {} from {}, mean ΔE2000 {:.3}; wrote {}",
        counted(doc.k as u64, "colour"),
        counted(doc.colors.iter().map(|c| c.pixels).sum::<u64>(), "pixel"),
        doc.mean_delta_e2000,
        args.out.display()
    );
    if args.json {
        emit_json(doc);
    }
    Ok(some_failed(failed))
}

fn run_apply(args: &ApplyArgs) -> Result<ExitCode, Error> {
    let palette = learn::read_palette(&args.palette)?;
    let report = reduce::reduce_file_with(
        &args.input,
        &args.output.out,
        &args.options(),
        Some(&palette),
        &[args.palette.as_path()],
    )?;
    print_reduce_summary(&args.input, &report, args.output.json);
    Ok(ExitCode::SUCCESS)
}

fn run_histogram(args: &HistogramArgs) -> Result<ExitCode, Error> {
    let limits = args.limit.limits();
    let pooled = features::histogram_file::gather_lenient(&args.inputs, &limits)?;
    let failed = report_failures(&pooled.failures);
    profile_notes(&pooled.inputs);
    let hist = &pooled.histogram;
    let read = features::histogram_file::input_files(&args.inputs)?;
    let bytes = features::histogram_file::encode_with_inputs(hist, &pooled.inputs);
    write_or_stdout(&args.out, &bytes, &read)?;
    let (n, distinct) = (hist.total(), hist.len());
    eprintln!("chromasift: wrote {} ({n} pixels)", args.out.display());
    if args.json {
        emit(
            &serde_json::json!({
                "file": args.out.to_string_lossy(),
                "pixels": n,
                "distinct_colours": distinct,
                "input_profiles": pooled.inputs,
            })
            .to_string(),
        );
    }
    Ok(some_failed(failed))
}

fn run_manpage(args: &ManpageArgs) -> Result<ExitCode, Error> {
    let pages = manual_pages();
    if args.all {
        let dir = args.out.as_deref().expect("clap requires -o with --all");
        let mut set = crate::output::OutputSet::prepare(dir, &[])?;
        for (name, roff) in &pages {
            set.write_bytes(name, roff)?;
        }
        let written = set.commit()?;
        eprintln!(
            "chromasift: wrote {} manual pages into {}",
            written.len(),
            dir.display()
        );
        return Ok(ExitCode::SUCCESS);
    }
    let wanted = match &args.command {
        None => "chromasift.1".to_string(),
        Some(c) => format!("chromasift-{c}.1"),
    };
    match pages.iter().find(|(n, _)| *n == wanted) {
        Some((_, roff)) => {
            write_stdout(roff)?;
            Ok(ExitCode::SUCCESS)
        }
        None => {
            let names = super::help::command_names();
            let hint = super::help::suggest(
                args.command.as_deref().unwrap_or_default(),
                names.iter().map(String::as_str),
            )
            .map(|n| format!("; did you mean '{n}'?"))
            .unwrap_or_default();
            Ok(fail(format!(
                "no manual page for '{}'{hint} (commands: {})",
                args.command.as_deref().unwrap_or_default(),
                names.join(", ")
            )))
        }
    }
}

/// With a given palette (`batch --palette`), says which of the flags that only shape how
/// a palette is fitted were given anyway.
fn note_fitting_flags(command: &str, args: &BatchArgs) {
    let p = &args.palette;
    let mut ignored: Vec<String> = [
        (p.k != 8, "-k"),
        (p.target_delta_e.is_some(), "--target-delta-e"),
        (!p.pin.is_empty(), "--pin"),
        (!p.pin_file.is_empty(), "--pin-file"),
    ]
    .into_iter()
    .filter(|&(set, _)| set)
    .map(|(_, name)| name.to_string())
    .collect();
    ignored.extend(
        args.engine
            .options()
            .changed()
            .into_iter()
            .filter(|n| *n != "beta")
            .map(|n| flag_wording(&format!("`{n}`"))),
    );
    if !ignored.is_empty() {
        eprintln!(
            "chromasift: note: {command} maps onto the palette's colours as they are; {} \
             only change how a palette is fitted, so they have no effect here",
            ignored.join(", ")
        );
    }
}

fn run_batch(args: BatchArgs) -> ExitCode {
    use std::io::IsTerminal;
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    if args.palette_file.is_some() {
        note_fitting_flags("batch --palette", &args);
    }
    let palette = match args
        .palette_file
        .as_deref()
        .map(learn::read_palette)
        .transpose()
    {
        Ok(p) => p,
        Err(e) => return fail(e),
    };
    let opts = batch::BatchOptions {
        reduce: args.options(),
        shared: args.shared,
        equal_weight: args.equal_weight,
        jobs: args
            .jobs
            .map(usize::from)
            .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get())),
        force: args.force,
        review_page: args.review_page,
        palette,
        palette_file: args.palette_file.clone(),
    };
    let bar = (!args.quiet && std::io::stderr().is_terminal()).then(|| {
        let b = indicatif::ProgressBar::new(0);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{bar:30} {pos}/{len} images  {per_sec}  about {eta} left",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    });
    let last_line = std::sync::Mutex::new(std::time::Instant::now());
    let progress = |done: usize, total: usize| {
        if args.quiet {
            return;
        }
        if let Some(b) = &bar {
            b.set_length(total as u64);
            b.set_position(done as u64);
        } else {
            let mut t = last_line.lock().unwrap_or_else(|p| p.into_inner());
            if done == total || t.elapsed().as_secs() >= 5 {
                eprintln!("chromasift: batch: {done}/{total} images");
                *t = std::time::Instant::now();
            }
        }
    };
    let result = batch::run_batch(&args.input, &args.out, &opts, &STOP, &progress);
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let r = match result {
        Ok(r) => r,
        Err(e) => return fail(e),
    };
    for f in r.files.iter().filter(|f| f.status == batch::Status::Failed) {
        eprintln!(
            "chromasift: failed: {}",
            f.error.as_deref().unwrap_or(&f.input)
        );
    }
    batch_remarks(&r);
    let t = &r.totals;
    eprintln!(
        "chromasift: batch: {}: {} reduced, {} up to date, {} failed{}; {} skipped; {:.1} s",
        counted(t.files as u64, "image"),
        t.ok,
        t.skipped,
        t.failed,
        if t.interrupted > 0 {
            format!(", {} not started (interrupted)", t.interrupted)
        } else {
            String::new()
        },
        counted(t.not_images as u64, "other file"),
        t.seconds
    );
    if args.json {
        emit_json(&r);
    }
    if STOP.load(Ordering::SeqCst) {
        ExitCode::from(EXIT_INTERRUPTED)
    } else if t.failed > 0 {
        ExitCode::from(EXIT_SOME_FAILED)
    } else {
        ExitCode::SUCCESS
    }
}

/// Most per-image warnings a batch prints; the rest are counted (all are in the report).
const BATCH_WARNINGS_SHOWN: usize = 5;

/// A batch's per-image warnings (lost colours: things to act on), up to
/// [`BATCH_WARNINGS_SHOWN`], and how many images have notes; both are in full in
/// `batch-report.json`.
fn batch_remarks(r: &batch::BatchReport) {
    let warned: Vec<(&str, &String)> = r
        .files
        .iter()
        .flat_map(|f| f.warnings.iter().map(move |w| (f.input.as_str(), w)))
        .collect();
    for (input, w) in warned.iter().take(BATCH_WARNINGS_SHOWN) {
        eprintln!("chromasift: warning: {input}: {}", flag_wording(w));
    }
    if warned.len() > BATCH_WARNINGS_SHOWN {
        let more = warned.len() - BATCH_WARNINGS_SHOWN;
        eprintln!(
            "chromasift: warning: {more} more warning{} (\"warnings\" in batch-report.json)",
            if more == 1 { "" } else { "s" }
        );
    }
    let noted = r.files.iter().filter(|f| !f.notes.is_empty()).count();
    if noted > 0 {
        eprintln!(
            "chromasift: note: {} notes (\"notes\" in batch-report.json)",
            if noted == 1 {
                "1 image has".to_string()
            } else {
                format!("{noted} images have")
            }
        );
    }
}

/// Prints one line per input that could not be read (the others were used); their count.
/// A note per input whose embedded profile could not be applied.
fn profile_notes(inputs: &[features::image::InputProfile]) {
    for i in inputs {
        if let Some(n) = &i.note {
            note(Path::new(&i.file), n);
        }
    }
}

fn report_failures(failures: &[(PathBuf, Error)]) -> usize {
    for (_, e) in failures {
        eprintln!("chromasift: failed: {e}");
    }
    failures.len()
}

/// Exit status 1 when some inputs failed (the others were used), else 0.
fn some_failed(failed: usize) -> ExitCode {
    if failed > 0 {
        eprintln!("chromasift: {failed} input(s) could not be read and were left out");
        ExitCode::from(EXIT_SOME_FAILED)
    } else {
        ExitCode::SUCCESS
    }
}

/// With a file-size limit set (`ulimit -f`), the kernel kills a process that writes past
/// it (SIGXFSZ), leaving its temporary file behind. Ignoring the signal turns that into a
/// write error (EFBIG) that is reported like a full disk, and the temporary file is
/// removed.
#[cfg(unix)]
fn ignore_file_size_signal() {
    // SAFETY: setting a signal's disposition to "ignore" at start-up, before any other
    // thread exists, has no memory-safety requirement.
    unsafe {
        libc::signal(libc::SIGXFSZ, libc::SIG_IGN);
    }
}
