//! Regions of a label image, and the two clean-ups that ink separation for screen printing needs:
//! merging regions too small to print into a neighbour ([`merge_small_regions`], which lives in
//! `features::merge` because land cover uses it too), and trapping
//! (each ink spreading a few pixels under its darker neighbours, [`trap`]).
//!
//! A label image is `width × height` labels (`u16`) in raster order: row by row, top row first,
//! so pixel `(x, y)` is at index `y * width + x`. Connectivity is 8-neighbour throughout. Pixels
//! labelled [`FIXED`] take no part. Every size, area and distance here is in pixels.
//!
//! Nothing here recurses. Regions are found by run-based union-find labelling (bands of rows in
//! parallel; the labelling itself, [`regions`] and [`region_pixels`], lives in
//! `features::components` and is re-exported here), and merging uses flood fills with an
//! explicit stack. Trapping is exact: for spreads up to 32 pixels it dilates bit-packed rows of
//! each ink by a digital disc (64 pixels per word operation); beyond that it uses the Euclidean
//! distance transform of Felzenszwalb & Huttenlocher 2012 (a capped column scan, then the lower
//! envelope of parabolas along each row, in exact integer arithmetic), in bands of rows in
//! parallel. Every result depends on the input alone, not on the thread count.

mod envelope;
mod trap;

pub use crate::features::components::{region_pixels, regions, FIXED};
pub use crate::features::merge::{merge_small_regions, MergeStats};
pub use trap::trap;
