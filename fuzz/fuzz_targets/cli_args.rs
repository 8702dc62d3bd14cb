//! Arbitrary text as a whole command line: split on newlines into arguments for
//! `Cli::try_parse_from`; whatever parses is resolved into library options and checked
//! k-means parameters, as the binary does before any work.
#![no_main]

use chromasift::cli::{Cli, Command};
use clap::Parser;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let args = std::iter::once("chromasift").chain(text.split('\n'));
    let Ok(cli) = Cli::try_parse_from(args) else {
        return;
    };
    let reduce = match &cli.command {
        Command::Reduce(a) => Some(a.options()),
        Command::Batch(a) => Some(a.options()),
        Command::Learn(a) => Some(a.options()),
        Command::Apply(a) => Some(a.options()),
        Command::Separate(a) => {
            let _ = a.options();
            None
        }
        Command::Landcover(a) => {
            let _ = a.options();
            None
        }
        _ => None,
    };
    if let Some(o) = reduce {
        let _ = o.kmeans_params().check();
    }
});
