//! Reduce the bundled demo poster to 6 colours and print its palette.
//!
//!     cargo run --release --example reduce [IMAGE] [K]

use chromasift::reduce::{reduce_file, ReduceOptions};
use std::path::PathBuf;

fn main() -> Result<(), chromasift::Error> {
    let mut args = std::env::args().skip(1);
    let input = args
        .next()
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from("fixtures/demo/harbour-poster.png"));
    let k = args.next().and_then(|a| a.parse().ok()).unwrap_or(6);
    let out = std::env::temp_dir().join("chromasift-example-reduce");
    let report = reduce_file(&input, &out, &ReduceOptions::new(k))?;
    for c in &report.document.colors {
        println!(
            "{} {:5.1} %  uncertainty {:.3}",
            c.hex,
            100.0 * c.share,
            c.mean_uncertainty
        );
    }
    println!(
        "mean ΔE2000 {:.2}; outputs in {}",
        report.document.mean_delta_e2000,
        out.display()
    );
    Ok(())
}
