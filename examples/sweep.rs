//! Score K = 2..12 on the demo poster and print the suggested K.
//!
//!     cargo run --release --example sweep

use chromasift::sweep::{sweep_file, KRange, SweepOptions};
use std::path::Path;

fn main() -> Result<(), chromasift::Error> {
    let out = std::env::temp_dir().join("chromasift-example-sweep");
    let opts = SweepOptions::new(KRange { min: 2, max: 12 });
    let report = sweep_file(Path::new("fixtures/demo/harbour-poster.png"), &out, &opts)?;
    for r in &report.document.rows {
        println!(
            "K {:2}: mean ΔE2000 {:6.2}  silhouette {:.3}",
            r.k,
            r.mean_delta_e2000.unwrap_or(f64::NAN),
            r.silhouette.unwrap_or(f64::NAN)
        );
    }
    println!("suggested: {:?}", report.document.suggested);
    Ok(())
}
