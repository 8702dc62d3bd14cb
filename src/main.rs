//! The `chromasift` binary: parses flags, calls the library, maps the result to an exit code.

use chromasift::cli::{Cli, Command};
use chromasift::{batch, reduce};
use std::io::Write;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};

/// mimalloc keeps freed pages for reuse, so a batch of images does not pay the kernel
/// again for every large buffer (measured in DEVELOPERS.md).
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

/// Exit codes: 0 success, 1 some inputs failed (batches), 2 usage or input error.
const EXIT_USAGE: u8 = 2;

fn fail(message: impl std::fmt::Display) -> ExitCode {
    eprintln!(
        "chromasift: error: {}",
        chromasift::batch::one_line(&message.to_string())
    );
    ExitCode::from(EXIT_USAGE)
}

/// Exit code when some inputs of a batch failed.
const EXIT_SOME_FAILED: u8 = 1;
/// Exit code after Ctrl-C (128 + SIGINT).
const EXIT_INTERRUPTED: u8 = 130;

static STOP: AtomicBool = AtomicBool::new(false);

fn read_palette(path: &std::path::Path) -> Result<reduce::FixedPalette, chromasift::Error> {
    let limits = chromasift::Limits::default();
    let text = limits
        .read_text(path, "palette document")
        .map_err(|e| match e {
            chromasift::Error::Decode { path, message } if message.contains("UTF-8") => {
                chromasift::Error::Decode {
                    path,
                    message: "not a palette document: not UTF-8 text".into(),
                }
            }
            e => e,
        })?;
    let bad = |message: String| chromasift::Error::Decode {
        path: path.into(),
        message,
    };
    let value: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| bad(format!("not a palette document: {e}")))?;
    if !value.is_object() {
        return Err(bad(
            "not a palette document: expected a JSON object (a palette.json written by \
             reduce, learn or batch --shared)"
                .into(),
        ));
    }
    let doc: reduce::PaletteDocument =
        serde_json::from_value(value).map_err(|e| bad(format!("not a palette document: {e}")))?;
    if doc.colors.len() > limits.max_entries {
        return Err(chromasift::Error::LimitExceeded {
            path: path.into(),
            message: format!(
                "the palette has {} colours; at most {} are accepted",
                doc.colors.len(),
                limits.max_entries
            ),
        });
    }
    reduce::FixedPalette::from_document(&doc).map_err(|message| chromasift::Error::Decode {
        path: path.into(),
        message,
    })
}

/// `reduce` with standard input (`-`) as input and/or one output on standard output.
fn reduce_stream(
    args: &chromasift::cli::ReduceArgs,
) -> Result<reduce::ReduceReport, chromasift::Error> {
    use std::io::Read;
    let t0 = std::time::Instant::now();
    let opts = args.options();
    let from_stdin = args.input.as_os_str() == "-";
    let name = if from_stdin {
        std::path::PathBuf::from("standard input")
    } else {
        args.input.clone()
    };
    let bytes = if from_stdin {
        let mut b = Vec::new();
        std::io::stdin()
            .lock()
            .take(opts.limits.max_alloc + 1)
            .read_to_end(&mut b)
            .map_err(|e| chromasift::Error::io(&name, e))?;
        if b.len() as u64 > opts.limits.max_alloc {
            return Err(chromasift::Error::LimitExceeded {
                path: name,
                message: format!("input is over the limit of {} bytes", opts.limits.max_alloc),
            });
        }
        b
    } else {
        std::fs::read(&args.input).map_err(|source| chromasift::Error::Open {
            path: args.input.clone(),
            source,
        })?
    };
    let mut red = reduce::reduce_bytes(&bytes, &name, &opts)?;
    drop(bytes);
    if !from_stdin {
        red.document.input = args
            .input
            .file_name()
            .map(|n| n.to_string_lossy().into_owned());
    }
    let outputs = match args.stdout {
        Some(which) => {
            let data = reduce::encode_one(&red, which);
            let mut out = std::io::stdout().lock();
            stdout_open()
                .and_then(|()| out.write_all(&data))
                .and_then(|_| out.flush())
                .map_err(|e| chromasift::Error::io(std::path::Path::new("standard output"), e))?;
            Vec::new()
        }
        None => {
            let mut set = chromasift::output::OutputSet::prepare(&args.out, &[])?;
            reduce::write_reduction(&red, "stdin", &mut set, opts.uncertainty_raw)?;
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

fn print_reduce_summary(input: &std::path::Path, report: &reduce::ReduceReport, json: bool) {
    for n in &report.notes {
        eprintln!("chromasift: note: {}: {n}", input.display());
    }
    for w in &report.warnings {
        eprintln!("chromasift: warning: {}: {w}", input.display());
    }
    let d = &report.document;
    eprintln!(
        "chromasift: {}: {} colours, {} iterations, SSE {:.6e}, mean ΔE2000 {:.3}, {:.2} s",
        input.display(),
        d.k,
        d.iterations,
        d.sse,
        d.mean_delta_e2000,
        report.seconds
    );
    if json {
        let mut out = std::io::stdout().lock();
        emit(
            &mut out,
            &serde_json::to_string_pretty(d).expect("document serialises"),
        );
    }
}

/// With a given palette (`apply`, `batch --palette`), says which of the flags that only
/// shape how a palette is fitted were given anyway.
fn note_fitting_flags(command: &str, f: &chromasift::cli::ReduceFlags) {
    let ignored: Vec<&str> = [
        (f.k != 8, "-k"),
        (f.restarts != 1, "--restarts"),
        (f.target_delta_e.is_some(), "--target-delta-e"),
        (f.anneal, "--anneal"),
        (f.split_merge.is_some(), "--split-merge"),
        (f.max_iter != 300, "--max-iter"),
    ]
    .into_iter()
    .filter_map(|(set, name)| set.then_some(name))
    .collect();
    if !ignored.is_empty() {
        eprintln!(
            "chromasift: note: {command} maps onto the palette's colours as they are; {} \
             only change how a palette is fitted, so they have no effect here",
            ignored.join(", ")
        );
    }
}

fn run_batch(args: chromasift::cli::BatchArgs) -> ExitCode {
    use std::io::IsTerminal;
    let _ = ctrlc::set_handler(|| STOP.store(true, Ordering::SeqCst));
    if args.palette.is_some() {
        note_fitting_flags("batch --palette", &args.settings);
    }
    let palette = match args.palette.as_deref().map(read_palette).transpose() {
        Ok(p) => p,
        Err(e) => return fail(e),
    };
    let opts = batch::BatchOptions {
        reduce: args.settings.options(),
        shared: args.shared,
        jobs: args
            .jobs
            .map(usize::from)
            .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get())),
        force: args.force,
        contact_sheet: args.contact_sheet,
        palette,
        palette_file: args.palette.clone(),
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
            let mut t = last_line.lock().unwrap();
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
    match result {
        Ok(r) => {
            for f in r.files.iter().filter(|f| f.status == batch::Status::Failed) {
                eprintln!(
                    "chromasift: failed: {}",
                    f.error.as_deref().unwrap_or(&f.input)
                );
            }
            let t = &r.totals;
            eprintln!(
                "chromasift: batch: {} images: {} reduced, {} up to date, {} failed{}; {} other files skipped; {:.1} s",
                t.files,
                t.ok,
                t.skipped,
                t.failed,
                if t.interrupted > 0 { format!(", {} not started (interrupted)", t.interrupted) } else { String::new() },
                t.not_images,
                t.seconds
            );
            if args.json {
                let mut out = std::io::stdout().lock();
                emit(
                    &mut out,
                    &serde_json::to_string_pretty(&r).expect("report serialises"),
                );
            }
            if STOP.load(Ordering::SeqCst) {
                ExitCode::from(EXIT_INTERRUPTED)
            } else if t.failed > 0 {
                ExitCode::from(EXIT_SOME_FAILED)
            } else {
                ExitCode::SUCCESS
            }
        }
        Err(e) => fail(e),
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

/// Parses the command line. Every option that takes a value accepts a negative number as
/// that value: `-k -3` is refused by the option's own rule, not taken for an unknown
/// flag `-3`.
fn parse_command_line() -> Result<Cli, clap::Error> {
    use clap::{CommandFactory, FromArgMatches};
    fn negatives(a: clap::Arg) -> clap::Arg {
        if a.get_action().takes_values() && !a.is_positional() {
            a.allow_negative_numbers(true)
        } else {
            a
        }
    }
    let cmd = Cli::command()
        .mut_args(negatives)
        .mut_subcommands(|sub| sub.mut_args(negatives));
    Cli::from_arg_matches(&cmd.try_get_matches()?)
}

/// One line from clap's error text: its first line without the `error: ` prefix, and, for
/// a list such as the missing required arguments, the listed items after it.
fn usage_error_line(text: &str) -> String {
    let mut lines = text.lines();
    let first = lines.next().unwrap_or("").trim_start_matches("error: ");
    let first = first.trim_end();
    if let Some(head) = first.strip_suffix(':') {
        let items: Vec<&str> = lines
            .take_while(|l| !l.trim().is_empty())
            .map(str::trim)
            .collect();
        if !items.is_empty() {
            return format!("{head}: {}", items.join(", "));
        }
    }
    first.to_string()
}

/// Set when writing to standard output failed; the exit status is then 2.
static STDOUT_FAILED: AtomicBool = AtomicBool::new(false);

/// Writes one output file atomically, sparing the inputs; `-` writes to standard output.
fn write_or_stdout(
    out: &std::path::Path,
    bytes: &[u8],
    inputs: &[std::path::PathBuf],
) -> Result<(), chromasift::Error> {
    if out.as_os_str() == "-" {
        let mut o = std::io::stdout().lock();
        return stdout_open()
            .and_then(|()| o.write_all(bytes))
            .and_then(|()| o.flush())
            .map_err(|e| chromasift::Error::io(std::path::Path::new("standard output"), e));
    }
    chromasift::output::write_file_sparing(
        out,
        bytes,
        &inputs
            .iter()
            .map(std::path::PathBuf::as_path)
            .collect::<Vec<_>>(),
    )?;
    Ok(())
}

/// Standard input copied into `stdin.tif` (TIFF bytes) or `stdin.img` in a new temporary
/// folder, at most the default allocation limit.
fn stdin_to_file() -> Result<(tempfile::TempDir, std::path::PathBuf), chromasift::Error> {
    use std::io::Read;
    let name = std::path::Path::new("standard input");
    let limit = chromasift::Limits::default().max_alloc;
    let mut bytes = Vec::new();
    std::io::stdin()
        .lock()
        .take(limit + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| chromasift::Error::io(name, e))?;
    if bytes.len() as u64 > limit {
        return Err(chromasift::Error::LimitExceeded {
            path: name.into(),
            message: format!("input is over the limit of {limit} bytes"),
        });
    }
    let tiff = bytes.starts_with(b"II*\0")
        || bytes.starts_with(b"MM\0*")
        || bytes.starts_with(b"II+\0")
        || bytes.starts_with(b"MM\0+");
    let dir = tempfile::tempdir().map_err(|e| chromasift::Error::io(name, e))?;
    let path = dir
        .path()
        .join(if tiff { "stdin.tif" } else { "stdin.img" });
    std::fs::write(&path, &bytes).map_err(|e| chromasift::Error::io(&path, e))?;
    Ok((dir, path))
}

/// Prints one line per input that could not be read (the others were used); their count.
fn report_failures(failures: &[(std::path::PathBuf, chromasift::Error)]) -> usize {
    for (_, e) in failures {
        eprintln!("chromasift: failed: {e}");
    }
    failures.len()
}

/// Writes one document and a newline to standard output; a failure (a full disk, a closed
/// pipe) is reported once on standard error and makes the exit status 2.
fn emit(out: &mut impl Write, text: &str) {
    let result = stdout_open()
        .and_then(|()| writeln!(out, "{text}"))
        .and_then(|()| out.flush());
    stdout_result(result);
}

/// Whether standard output was closed when the process started (`>&-`). The Rust runtime
/// puts /dev/null in place of a closed descriptor before `main`, so this is recorded by a
/// constructor that runs before it (ELF `.init_array`, on Linux).
static STDOUT_CLOSED_AT_START: AtomicBool = AtomicBool::new(false);

#[cfg(target_os = "linux")]
#[used]
#[link_section = ".init_array"]
static RECORD_CLOSED_STDOUT: extern "C" fn() = {
    extern "C" fn record() {
        // SAFETY: F_GETFD only queries the descriptor's flags.
        if unsafe { libc::fcntl(1, libc::F_GETFD) } == -1 {
            STDOUT_CLOSED_AT_START.store(true, Ordering::SeqCst);
        }
    }
    record
};

/// An error when standard output is closed: what is written there would be lost without a
/// word.
fn stdout_open() -> std::io::Result<()> {
    if STDOUT_CLOSED_AT_START.load(Ordering::SeqCst) {
        return Err(std::io::Error::other("standard output is closed"));
    }
    Ok(())
}

/// Records a failed write to standard output. A closed pipe (`… | head`) is not worth a
/// message, but still makes the exit status 2.
fn stdout_result(result: std::io::Result<()>) {
    if let Err(e) = result {
        if !STDOUT_FAILED.swap(true, Ordering::SeqCst) && e.kind() != std::io::ErrorKind::BrokenPipe
        {
            eprintln!("chromasift: error: standard output: {e}");
        }
    }
}

fn main() -> ExitCode {
    let code = run();
    if STDOUT_FAILED.load(Ordering::SeqCst) {
        return ExitCode::from(2);
    }
    code
}

fn run() -> ExitCode {
    #[cfg(unix)]
    ignore_file_size_signal();
    let cli = match parse_command_line() {
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
                return ExitCode::from(2);
            }
            return fail(format!("{} (see --help)", usage_error_line(&e.to_string())));
        }
    };
    if !matches!(cli.command, Command::Batch(_)) {
        // Ctrl-C or SIGTERM: remove the temporary files being written and stop (a batch
        // has its own handler, which finishes the images under way and writes its report).
        let _ = ctrlc::set_handler(|| {
            eprintln!("chromasift: interrupted; unfinished outputs removed");
            chromasift::output::abandon_and_exit(130);
        });
    }
    // `-` as the input of a command that reads one image or scene: standard input, held in
    // a temporary file named `stdin.*` (so outputs are named stdin.*) for the run.
    // Standard input can be read once only.
    let twice = match &cli.command {
        Command::Separate(a) => a.input.as_os_str() == "-" && a.inks.as_os_str() == "-",
        Command::Apply(a) => a.input.as_os_str() == "-" && a.palette.as_os_str() == "-",
        _ => false,
    };
    if twice {
        return fail(
            "standard input (-) can hold the image or the second input file, not both".to_string(),
        );
    }
    let json_twice = match &cli.command {
        Command::Learn(a) => a.out.as_os_str() == "-" && a.json,
        Command::Histogram(a) => a.out.as_os_str() == "-" && a.json,
        _ => false,
    };
    if json_twice {
        return fail(
            "--json cannot be combined with -o - (standard output already holds the output)"
                .to_string(),
        );
    }
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
    match cli.command {
        Command::Reduce(args) if args.input.as_os_str() == "-" || args.stdout.is_some() => {
            match reduce_stream(&args) {
                Ok(report) => {
                    print_reduce_summary(&args.input, &report, args.json);
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Reduce(args) => {
            let opts = args.options();
            match reduce::reduce_file(&args.input, &args.out, &opts) {
                Ok(report) => {
                    print_reduce_summary(&args.input, &report, args.json);
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Separate(args) => {
            let opts = args.options();
            match chromasift::separate::separate_file(&args.input, &args.inks, &args.out, &opts) {
                Ok(report) => {
                    for n in &report.document.notes {
                        eprintln!("chromasift: note: {}: {n}", args.input.display());
                    }
                    eprintln!("{}", chromasift::separate::summary_table(&report.document));
                    eprintln!(
                        "chromasift: {}: {} plates written in {:.2} s",
                        args.input.display(),
                        report.document.inks.len(),
                        report.seconds
                    );
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        emit(
                            &mut out,
                            &serde_json::to_string_pretty(&report.document)
                                .expect("document serialises"),
                        );
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Landcover(args) => {
            let opts = args.options();
            match chromasift::landcover::landcover_file(&args.input, &args.out, &opts) {
                Ok(report) => {
                    let d = &report.document;
                    eprintln!(
                        "chromasift: {}: {} classes over {} valid pixels ({} nodata), SSE {:.6e}, {:.2} s",
                        args.input.display(),
                        d.k,
                        d.valid_pixels,
                        d.nodata_pixels,
                        d.sse,
                        report.seconds
                    );
                    eprintln!("chromasift: caution: {}", chromasift::landcover::CAUTION);
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        emit(
                            &mut out,
                            &serde_json::to_string_pretty(d).expect("document serialises"),
                        );
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Sweep(args) => {
            let opts = args.options();
            match chromasift::sweep::sweep_file(&args.input, &args.out, &opts) {
                Ok(report) => {
                    for n in &report.notes {
                        eprintln!("chromasift: note: {}: {n}", args.input.display());
                    }
                    let d = &report.document;
                    let suggested: Vec<String> = d
                        .suggested
                        .iter()
                        .map(|(c, k)| format!("{c} K = {k}"))
                        .collect();
                    eprintln!(
                        "chromasift: {}: swept K {}..{}; suggested: {}; {:.2} s",
                        args.input.display(),
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
                            args.input.display(),
                            r.k,
                            r.rule,
                            r.agreement,
                            r.reason
                        );
                    }
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        emit(
                            &mut out,
                            &serde_json::to_string_pretty(d).expect("document serialises"),
                        );
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Batch(args) => run_batch(args),
        Command::Completions(args) => {
            use clap::CommandFactory;
            let mut cmd = Cli::command();
            let mut script = Vec::new();
            clap_complete::generate(args.shell, &mut cmd, "chromasift", &mut script);
            let mut out = std::io::stdout().lock();
            stdout_result(out.write_all(&script).and_then(|()| out.flush()));
            ExitCode::SUCCESS
        }
        Command::Manpage => {
            use clap::CommandFactory;
            let mut out = std::io::stdout().lock();
            match clap_mangen::Man::new(Cli::command()).render(&mut out) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => fail(format!("standard output: {e}")),
            }
        }
        Command::Learn(args) => {
            if args.settings.dither != chromasift::render::Dither::None
                || args.settings.uncertainty_raw
            {
                eprintln!(
                    "chromasift: note: learn writes a palette only; --dither and \
                     --uncertainty-raw apply to images (use them with apply)"
                );
            }
            let opts = args.settings.options();
            let mut failed = 0;
            let result = (|| -> Result<reduce::PaletteDocument, chromasift::Error> {
                opts.kmeans_params().check()?;
                let (hist, failures) = batch::gather_histograms_lenient(&args.inputs, &opts)?;
                failed = report_failures(&failures);
                let doc = reduce::learn_palette(&hist, &opts)?;
                let json = serde_json::to_string_pretty(&doc).expect("document serialises");
                let read = batch::input_files(&args.inputs)?;
                write_or_stdout(&args.out, format!("{json}\n").as_bytes(), &read)?;
                Ok(doc)
            })();
            match result {
                Ok(doc) => {
                    eprintln!(
                        "chromasift: learned {} colours from {} pixels, mean ΔE2000 {:.3}; wrote {}",
                        doc.k,
                        doc.colors.iter().map(|c| c.pixels).sum::<u64>(),
                        doc.mean_delta_e2000,
                        args.out.display()
                    );
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        emit(
                            &mut out,
                            &serde_json::to_string_pretty(&doc).expect("document serialises"),
                        );
                    }
                    some_failed(failed)
                }
                Err(e) => fail(e),
            }
        }
        Command::Apply(args) => {
            note_fitting_flags("apply", &args.settings);
            let opts = args.settings.options();
            let palette = match read_palette(&args.palette) {
                Ok(p) => p,
                Err(e) => return fail(e),
            };
            match reduce::reduce_file_with(
                &args.input,
                &args.out,
                &opts,
                Some(&palette),
                false,
                &[args.palette.as_path()],
            ) {
                Ok(report) => {
                    print_reduce_summary(&args.input, &report, args.json);
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Histogram(args) => {
            let opts = reduce::ReduceOptions {
                limits: chromasift::Limits::with_max_pixels(args.max_pixels),
                ..reduce::ReduceOptions::new(1)
            };
            let mut failed = 0;
            let result = (|| -> Result<(u64, usize), chromasift::Error> {
                let (hist, failures) = batch::gather_histograms_lenient(&args.inputs, &opts)?;
                failed = report_failures(&failures);
                let read = batch::input_files(&args.inputs)?;
                write_or_stdout(&args.out, &batch::encode_histogram(&hist), &read)?;
                Ok((hist.total(), hist.len()))
            })();
            match result {
                Ok((n, distinct)) => {
                    eprintln!("chromasift: wrote {} ({n} pixels)", args.out.display());
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        emit(
                            &mut out,
                            &serde_json::json!({
                                "file": args.out.to_string_lossy(),
                                "pixels": n,
                                "distinct_colours": distinct,
                            })
                            .to_string(),
                        );
                    }
                    some_failed(failed)
                }
                Err(e) => fail(e),
            }
        }
    }
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
