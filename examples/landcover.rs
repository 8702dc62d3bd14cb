//! Split a bundled 4-band GeoTIFF into unsupervised classes. The result is not a
//! validated classification: check it against ground truth before any decision.
//!
//!     cargo run --release --example landcover

use chromasift::landcover::{landcover_file, LandcoverOptions};
use std::path::Path;

fn main() -> Result<(), chromasift::Error> {
    let out = std::env::temp_dir().join("chromasift-example-landcover");
    let opts = LandcoverOptions {
        k: 4,
        ..LandcoverOptions::default()
    };
    let report = landcover_file(
        Path::new("fixtures/rasters/utm_u16_4band_strips.tif"),
        &out,
        &opts,
    )?;
    for c in &report.document.classes {
        println!("class {}: {} pixels", c.class, c.pixels);
    }
    println!("{}", chromasift::landcover::CAUTION);
    Ok(())
}
