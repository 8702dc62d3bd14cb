//! Separate the demo poster into plates from the demo ink library.
//!
//!     cargo run --release --example separate

use chromasift::separate::{separate_file, SeparateOptions};
use std::path::Path;

fn main() -> Result<(), chromasift::Error> {
    let out = std::env::temp_dir().join("chromasift-example-separate");
    let opts = SeparateOptions {
        k: 4,
        ..SeparateOptions::default()
    };
    let report = separate_file(
        Path::new("fixtures/demo/harbour-poster.png"),
        Path::new("fixtures/demo/quayside-inks.csv"),
        &out,
        &opts,
    )?;
    for ink in &report.document.inks {
        println!(
            "{:24} coverage {:5.1} %  plate {}",
            ink.name,
            100.0 * ink.coverage,
            ink.plate
        );
    }
    println!("mean ΔE2000 {:.2}", report.document.mean_delta_e2000);
    Ok(())
}
