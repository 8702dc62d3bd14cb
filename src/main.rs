//! The `chromasift` binary: parses flags, calls the library, maps the result to an exit code.

use chromasift::cli::{Cli, Command};
use clap::Parser;
use std::io::Write;
use std::process::ExitCode;

/// Exit codes: 0 success, 1 some inputs failed (batches), 2 usage or input error.
const EXIT_USAGE: u8 = 2;

fn fail(message: impl std::fmt::Display) -> ExitCode {
    eprintln!("chromasift: error: {message}");
    ExitCode::from(EXIT_USAGE)
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            use clap::error::ErrorKind as K;
            if matches!(
                e.kind(),
                K::DisplayHelp | K::DisplayVersion | K::DisplayHelpOnMissingArgumentOrSubcommand
            ) {
                let _ = e.print();
                return ExitCode::SUCCESS;
            }
            // One line: clap's first line without its own prefix.
            let text = e.to_string();
            let first = text
                .lines()
                .next()
                .unwrap_or("")
                .trim_start_matches("error: ");
            return fail(format!("{first} (see --help)"));
        }
    };
    match cli.command {
        Command::Reduce(args) => {
            let opts = args.options();
            match chromasift::reduce::reduce_file(&args.input, &args.out, &opts) {
                Ok(report) => {
                    for n in &report.notes {
                        eprintln!("chromasift: note: {}: {n}", args.input.display());
                    }
                    let d = &report.document;
                    eprintln!(
                        "chromasift: {}: {} colours, {} iterations, SSE {:.6e}, mean ΔE2000 {:.3}, {:.2} s",
                        args.input.display(),
                        d.k,
                        d.iterations,
                        d.sse,
                        d.mean_delta_e2000,
                        report.seconds
                    );
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        let _ = writeln!(
                            out,
                            "{}",
                            serde_json::to_string_pretty(d).expect("document serialises")
                        );
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
        Command::Separate(args) => {
            let opts = args.options();
            match chromasift::separate::separate_file(&args.input, &args.inks, &args.out, &opts) {
                Ok(report) => {
                    eprintln!("{}", chromasift::separate::summary_table(&report.document));
                    eprintln!(
                        "chromasift: {}: {} plates written in {:.2} s",
                        args.input.display(),
                        report.document.inks.len(),
                        report.seconds
                    );
                    if args.json {
                        let mut out = std::io::stdout().lock();
                        let _ = writeln!(
                            out,
                            "{}",
                            serde_json::to_string_pretty(&report.document)
                                .expect("document serialises")
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
                        let _ = writeln!(
                            out,
                            "{}",
                            serde_json::to_string_pretty(d).expect("document serialises")
                        );
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => fail(e),
            }
        }
    }
}
