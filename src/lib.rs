//! chromasift: split images into a few colours or classes with perceptual k-means.
//!
//! The data path: decode ([`raster`]) → exact weighted histogram of distinct colours
//! ([`histogram`]) → features in CIELAB or OKLab ([`colour`]) → weighted hard or soft
//! k-means ([`cluster`]) → per-entry results → rendering ([`render`]) → outputs written
//! to temporary files and renamed into place ([`output`]). The workflows ([`reduce`])
//! tie these together; the binary is a thin layer over them.
//!
//! Every workflow of the command line is a library call. Units: colour differences are
//! CIEDE2000 (ΔE2000) unless named otherwise; SSE is in squared clustering-space units
//! (ΔE*ab² for CIELAB); β is in 1/(clustering unit)². Defaults are those of the command
//! line, given on each options type. Runnable programs for each workflow live in
//! `examples/` (`cargo run --release --example reduce`, …).
//!
//! # Reduce an image in memory
//!
//! ```
//! use chromasift::raster::{Decoded, Pixels};
//! use chromasift::reduce::{reduce_image, ReduceOptions};
//!
//! // A 64 × 8 two-colour gradient (invented for this example).
//! let (w, h) = (64u32, 8u32);
//! let mut rgba = Vec::new();
//! for _y in 0..h {
//!     for x in 0..w {
//!         let t = x as f64 / (w - 1) as f64;
//!         let mix = |a: f64, b: f64| (a + (b - a) * t).round() as u8;
//!         rgba.extend_from_slice(&[mix(200.0, 20.0), mix(40.0, 90.0), mix(30.0, 160.0), 255]);
//!     }
//! }
//! let img = Decoded { width: w, height: h, pixels: Pixels::Rgba8(rgba), has_alpha: false, dpi: None, more_frames: false, icc_profile: None, exif: None, icc_unreadable: None };
//! let red = reduce_image(&img, &ReduceOptions::new(3)).unwrap();
//! assert_eq!(red.document.k, 3);
//! assert!(red.document.mean_delta_e2000 < 10.0);
//! // The pixels between two palette colours are the uncertain ones.
//! assert!(red.entry_uncertainty.iter().any(|&u| u > 0.5));
//! ```
//!
//! # Cluster any weighted rows
//!
//! ```
//! use chromasift::cluster::{fit, Dataset, KMeansParams, Mode};
//!
//! let rows = [0.0f32, 0.1, 0.2, 10.0, 10.1, 10.2];
//! let weights = [1.0, 2.0, 1.0, 1.0, 1.0, 3.0];
//! let data = Dataset::new(&rows, 1, Some(&weights)).unwrap();
//! let params = KMeansParams::new(2).mode(Mode::Soft).seed(7).check().unwrap();
//! let model = fit(&data, &params).unwrap();
//! let mut means = model.means.clone();
//! means.sort_by(f64::total_cmp);
//! assert!((means[0] - 0.1).abs() < 1e-3 && (means[1] - 10.133).abs() < 1e-2);
//! ```
//!
//! # Files: reduce, separate, land cover, batch, sweep
//!
//! ```no_run
//! use chromasift::{batch, landcover, reduce, separate, sweep};
//! use std::path::Path;
//!
//! let out = Path::new("out");
//! reduce::reduce_file(Path::new("poster.png"), out, &reduce::ReduceOptions::new(6))?;
//! separate::separate_file(
//!     Path::new("artwork.png"),
//!     Path::new("inks.csv"),
//!     out,
//!     &separate::SeparateOptions::default(),
//! )?;
//! landcover::landcover_file(Path::new("scene.tif"), out, &landcover::LandcoverOptions::default())?;
//! let range = "2..16".parse::<sweep::KRange>().unwrap();
//! sweep::sweep_file(Path::new("poster.png"), out, &sweep::SweepOptions::new(range))?;
//! # let _ = batch::run_batch;
//! # Ok::<(), chromasift::Error>(())
//! ```

pub mod batch;
#[cfg(feature = "cli")]
pub mod cli;
pub mod cluster;
pub mod colour;
pub mod error;
pub mod families;
pub mod features;
pub mod film;
pub mod landcover;
pub mod learn;
pub mod limits;
pub mod output;
pub mod raster;
pub mod reduce;
pub mod render;
pub mod rng;
pub mod separate;
pub mod sweep;
pub mod trace;

// Paths of earlier releases, kept for callers of the library.
pub use colour::inks;
pub use features::histogram;
pub use raster::geotiff;
pub use separate::{regions, select};

pub use error::{Error, ParamsError, Result};
pub use limits::Limits;

/// The version written into every output document.
pub const TOOL_VERSION: &str = env!("CARGO_PKG_VERSION");
