//! chromasift: split images into a few colours or classes with perceptual k-means.
//!
//! The data path: decode ([`raster`]) → exact weighted histogram of distinct colours
//! ([`histogram`]) → features in CIELAB or OKLab ([`colour`]) → weighted hard or soft
//! k-means ([`cluster`]) → per-entry results → rendering ([`render`]) → outputs written
//! to temporary files and renamed into place ([`output`]). The workflows ([`reduce`])
//! tie these together; the binary is a thin layer over them.

pub mod batch;
pub mod cli;
pub mod cluster;
pub mod colour;
pub mod error;
pub mod geotiff;
pub mod histogram;
pub mod inks;
pub mod landcover;
pub mod limits;
pub mod output;
pub mod raster;
pub mod reduce;
pub mod regions;
pub mod render;
pub mod rng;
pub mod select;
pub mod separate;
pub mod sweep;
pub mod trace;

pub use error::{Error, ParamsError, Result};
pub use limits::Limits;

/// The version written into every output document.
pub const TOOL_VERSION: &str = env!("CARGO_PKG_VERSION");
