//! What the engine is fed: exact weighted histograms of distinct colours, colour rows,
//! scene samples and histogram files; and the connected regions of label images.

pub mod components;
pub mod histogram;
pub mod histogram_file;
pub mod image;
pub mod merge;
pub mod quality;
pub mod rows;
pub mod scene;
