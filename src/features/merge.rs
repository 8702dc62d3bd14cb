//! Merging regions below a size into a neighbour: plates too small to print (`separate`),
//! patches below a minimum mapping unit (`landcover`).

use super::components::{components, label_band_rows, pixel_count, Flood, PixelIndex};

/// What [`merge_small_regions`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct MergeStats {
    /// Number of merges: each one relabels a whole region (of fewer than `min_area` pixels) to
    /// the label of a neighbour.
    pub merged: usize,
    /// Regions still smaller than `min_area` pixels at the end. Each of them touches only
    /// [`FIXED`](crate::features::components::FIXED) pixels and the image edge, so there was
    /// nothing to merge it into.
    pub kept_isolated: usize,
    /// Passes over the image's regions: 1 whenever anything was examined (one pass always
    /// suffices; see [`merge_small_regions`]), 0 when nothing was (`min_area <= 1`, an empty
    /// image, or a label slice whose length is not `width * height`).
    pub passes: usize,
}

/// Merges every 8-connected region (pixels of one label, FIXED excluded) smaller than `min_area`
/// pixels into the neighbouring label it shares the longest border with (border = number of
/// 8-neighbour pixel pairs between the region and pixels of that label; ties → the lower label value).
/// Regions are processed smallest first (ties: first pixel in raster order), sequentially, using the
/// current labels at the time each is processed; passes repeat until no region below min_area
/// can be merged. A small region whose only neighbours are FIXED pixels or the image edge is kept
/// (counted in kept_isolated). min_area <= 1 does nothing. `labels.len() == width*height`.
///
/// Details:
/// - A pass lists the regions of fewer than `min_area` pixels, ordered by (size, first pixel) as
///   they are when the pass starts. Each is then handled in turn as the region that *now*
///   contains its first pixel (earlier merges may have grown it): if that region has reached
///   `min_area` pixels it is left alone; otherwise all of it takes the winning neighbour's label.
/// - One pass always suffices, so `passes` is 1. Regions only grow (a merged region joins the
///   regions of its new label that it touches), and pixels of a region that starts with
///   `min_area` pixels or more are never relabelled. So a region R still below `min_area` after
///   the pass is made of listed regions, all handled; take the one handled last. It cannot have
///   been found large. If it was found isolated, it never changed again, so R is isolated.
///   Otherwise it took a label X and joined the X-regions it touched; each of those is part of
///   R, so was handled earlier, and can only have label X by an earlier merge into X that joined
///   still earlier X-regions, which cannot go on for ever. So every region below `min_area`
///   after one pass is isolated, and a second pass would merge nothing (the tests check this,
///   and compare with the rule applied pass after pass until nothing changes).
/// - When `labels.len() != width * height` nothing is done and the stats are all zero.
///
/// Cost: one run-based labelling (see [`regions`](crate::features::components::regions)), a
/// visited bit per pixel, and one flood fill per small region that stops at `min_area` pixels.
pub fn merge_small_regions(
    labels: &mut [u16],
    width: usize,
    height: usize,
    min_area: usize,
) -> MergeStats {
    if min_area <= 1 {
        return MergeStats::default();
    }
    match pixel_count(labels.len(), width, height) {
        Some(0) | None => MergeStats::default(),
        Some(n) if n < u32::MAX as usize => merge_impl::<u32>(labels, width, height, min_area),
        Some(_) => merge_impl::<usize>(labels, width, height, min_area),
    }
}

fn merge_impl<I: PixelIndex>(
    labels: &mut [u16],
    width: usize,
    height: usize,
    min_area: usize,
) -> MergeStats {
    // (size, first pixel) of every region below min_area, smallest first.
    let mut small: Vec<(I, I)> = Vec::new();
    components::<I>(
        labels,
        width,
        height,
        label_band_rows(width),
        |_, size, first| {
            if size < min_area {
                small.push((I::from_usize(size), I::from_usize(first)));
            }
        },
    );
    let mut stats = MergeStats {
        passes: 1,
        ..MergeStats::default()
    };
    if small.is_empty() {
        return stats;
    }
    // Order by (size, first pixel). The list is in raster order of first pixels, so a stable
    // counting sort by size does it in linear time when min_area is not too large.
    if min_area <= small.len() {
        let mut start = vec![0usize; min_area + 1];
        for &(size, _) in &small {
            start[size.get() + 1] += 1;
        }
        for k in 1..start.len() {
            start[k] += start[k - 1];
        }
        let mut sorted = small.clone();
        for &entry in &small {
            let k = &mut start[entry.0.get()];
            sorted[*k] = entry;
            *k += 1;
        }
        small = sorted;
    } else {
        small.sort_unstable();
    }

    let mut flood = Flood::new(labels.len());
    // First pixels of the regions found isolated; one region may be found from several seeds.
    let mut isolated: Vec<usize> = Vec::new();
    for &(_, seed) in &small {
        if !flood.small_region(labels, width, height, seed.get(), min_area) {
            continue;
        }
        match flood.best_neighbour() {
            Some(target) => {
                for &p in &flood.pixels {
                    labels[p] = target;
                }
                stats.merged += 1;
            }
            None => isolated.push(flood.pixels.iter().copied().min().unwrap_or(seed.get())),
        }
    }
    isolated.sort_unstable();
    isolated.dedup();
    stats.kept_isolated = isolated.len();
    stats
}

#[cfg(test)]
#[path = "merge_tests.rs"]
mod tests;
