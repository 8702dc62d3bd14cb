//! What the engine is fed: exact weighted histograms of distinct colours, colour rows,
//! scene samples and histogram files.

pub mod histogram;
