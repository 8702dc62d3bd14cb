//! Reduce every image of the demo folder with one shared 8-colour palette.
//!
//!     cargo run --release --example batch

use chromasift::batch::{run_batch, BatchOptions};
use chromasift::reduce::ReduceOptions;
use std::path::Path;
use std::sync::atomic::AtomicBool;

fn main() -> Result<(), chromasift::Error> {
    let out = std::env::temp_dir().join("chromasift-example-batch");
    let opts = BatchOptions {
        reduce: ReduceOptions::new(8),
        shared: true,
        equal_weight: false,
        jobs: 2,
        force: true,
        review_page: false,
        palette: None,
        palette_file: None,
    };
    let stop = AtomicBool::new(false);
    let report = run_batch(Path::new("fixtures/demo"), &out, &opts, &stop, &|_, _| {})?;
    for f in &report.files {
        println!(
            "{:32} {:?} ΔE2000 {:?}",
            f.input, f.status, f.mean_delta_e2000
        );
    }
    Ok(())
}
