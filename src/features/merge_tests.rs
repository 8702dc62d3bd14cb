use super::*;
use crate::features::components::testing::{blobs, grid, neighbours, reference_regions, region_of};
use crate::features::components::{regions, FIXED};
use std::collections::BTreeMap;

/// Border counts of a region: label → number of 8-neighbour pixel pairs.
fn borders(labels: &[u16], w: usize, h: usize, region: &[usize]) -> BTreeMap<u16, usize> {
    let mut map = BTreeMap::new();
    for &p in region {
        for q in neighbours(p, w, h) {
            if region.binary_search(&q).is_err() && labels[q] != FIXED {
                *map.entry(labels[q]).or_insert(0) += 1;
            }
        }
    }
    map
}

/// The merge rule written out literally, slowly: returns the number of merges.
fn reference_merge(labels: &mut [u16], w: usize, h: usize, min_area: usize) -> usize {
    if min_area <= 1 {
        return 0;
    }
    let mut merged = 0;
    loop {
        let mut small: Vec<(usize, usize)> = reference_regions(labels, w, h)
            .into_iter()
            .filter(|r| r.1 < min_area)
            .map(|r| (r.1, r.2))
            .collect();
        small.sort();
        let mut merged_now = 0;
        for (_, seed) in small {
            let region = region_of(labels, w, h, seed);
            if region.len() >= min_area {
                continue;
            }
            let mut best: Option<(u16, usize)> = None;
            for (l, c) in borders(labels, w, h, &region) {
                if best.is_none_or(|(_, bc)| c > bc) {
                    best = Some((l, c));
                }
            }
            if let Some((l, _)) = best {
                for &p in &region {
                    labels[p] = l;
                }
                merged_now += 1;
            }
        }
        merged += merged_now;
        if merged_now == 0 {
            return merged;
        }
    }
}

#[test]
fn speck_is_absorbed() {
    let mut l = vec![4u16; 25];
    l[12] = 9;
    let s = merge_small_regions(&mut l, 5, 5, 2);
    assert_eq!(l, vec![4u16; 25]);
    assert_eq!(
        s,
        MergeStats {
            merged: 1,
            kept_isolated: 0,
            passes: 1
        }
    );
}

#[test]
fn small_region_goes_to_longer_border() {
    // The 3-block shares 14 pixel pairs with label 1 and 6 with label 2.
    let (mut l, w, h) = grid(&[
        &[1, 1, 1, 2, 2, 2],
        &[1, 3, 3, 2, 2, 2],
        &[1, 3, 3, 2, 2, 2],
        &[1, 1, 1, 2, 2, 2],
    ]);
    let block = region_of(&l, w, h, 7);
    assert_eq!(borders(&l, w, h, &block), BTreeMap::from([(1, 14), (2, 6)]));
    let s = merge_small_regions(&mut l, w, h, 5);
    let (want, _, _) = grid(&[
        &[1, 1, 1, 2, 2, 2],
        &[1, 1, 1, 2, 2, 2],
        &[1, 1, 1, 2, 2, 2],
        &[1, 1, 1, 2, 2, 2],
    ]);
    assert_eq!(l, want);
    assert_eq!((s.merged, s.kept_isolated), (1, 0));
}

#[test]
fn border_tie_goes_to_lower_label() {
    // The 9-pair shares 7 pixel pairs with label 7 (left) and 7 with label 4 (right).
    let (mut l, w, h) = grid(&[&[7, 7, 4, 4], &[7, 9, 9, 4], &[7, 7, 4, 4]]);
    let pair = region_of(&l, w, h, 5);
    assert_eq!(borders(&l, w, h, &pair), BTreeMap::from([(4, 7), (7, 7)]));
    merge_small_regions(&mut l, w, h, 3);
    let (want, _, _) = grid(&[&[7, 7, 4, 4], &[7, 4, 4, 4], &[7, 7, 4, 4]]);
    assert_eq!(l, want);
}

#[test]
fn regions_are_handled_smallest_first_with_current_labels() {
    let f = FIXED;
    // The single 1 goes first and joins the pair of 2s, which then has 3 pixels.
    let (start, w, h) = grid(&[&[f, f, f, f, f], &[f, 1, 2, 2, f], &[f, f, f, f, f]]);
    let mut l = start.clone();
    let s = merge_small_regions(&mut l, w, h, 3);
    let (want, _, _) = grid(&[&[f, f, f, f, f], &[f, 2, 2, 2, f], &[f, f, f, f, f]]);
    assert_eq!(l, want);
    assert_eq!(
        s,
        MergeStats {
            merged: 1,
            kept_isolated: 0,
            passes: 1
        }
    );
    // With min_area 4 the grown region (3 pixels) has nowhere to go: kept.
    let mut l = start.clone();
    let s = merge_small_regions(&mut l, w, h, 4);
    assert_eq!(l, want);
    assert_eq!((s.merged, s.kept_isolated), (1, 1));
    // Equal sizes: the first pixel in raster order goes first.
    let (mut l, w, h) = grid(&[
        &[f, f, f, f, f, f],
        &[f, 5, 5, 6, 6, f],
        &[f, f, f, f, f, f],
    ]);
    merge_small_regions(&mut l, w, h, 3);
    assert_eq!(&l[7..11], &[6, 6, 6, 6]);
}

#[test]
fn region_enclosed_by_fixed_is_kept_and_counted() {
    let f = FIXED;
    let (start, w, h) = grid(&[
        &[1, 1, 1, 1, 1, 1],
        &[1, f, f, f, f, 1],
        &[1, f, 3, 3, f, 1],
        &[1, f, f, f, f, 1],
        &[1, 1, 1, 1, 1, 1],
    ]);
    let mut l = start.clone();
    let s = merge_small_regions(&mut l, w, h, 5);
    assert_eq!(l, start);
    assert_eq!(
        s,
        MergeStats {
            merged: 0,
            kept_isolated: 1,
            passes: 1
        }
    );
    // A whole image smaller than min_area has only the edge around it.
    let mut l = vec![5u16, 5];
    let s = merge_small_regions(&mut l, 2, 1, 3);
    assert_eq!(l, vec![5, 5]);
    assert_eq!((s.merged, s.kept_isolated), (0, 1));
    // Regions touching only FIXED pixels and the image edge.
    let (start, w, h) = grid(&[&[2, f, 3], &[f, f, f], &[4, f, 4]]);
    let mut l = start.clone();
    let s = merge_small_regions(&mut l, w, h, 2);
    assert_eq!(l, start);
    assert_eq!((s.merged, s.kept_isolated), (0, 4));
}

#[test]
fn min_area_one_or_less_and_degenerate_input_do_nothing() {
    let start = blobs(3, 9, 7, 4, true);
    for min_area in [0, 1] {
        let mut l = start.clone();
        assert_eq!(
            merge_small_regions(&mut l, 9, 7, min_area),
            MergeStats::default()
        );
        assert_eq!(l, start);
    }
    assert_eq!(
        merge_small_regions(&mut [], 0, 0, 50),
        MergeStats::default()
    );
    assert_eq!(
        merge_small_regions(&mut [], 0, 9, 50),
        MergeStats::default()
    );
    assert_eq!(
        merge_small_regions(&mut [], 9, 0, 50),
        MergeStats::default()
    );
    let mut l = vec![1u16, 2, 3];
    assert_eq!(merge_small_regions(&mut l, 2, 2, 50), MergeStats::default());
    assert_eq!(
        merge_small_regions(&mut l, usize::MAX, 3, 50),
        MergeStats::default()
    );
    assert_eq!(l, vec![1, 2, 3]);
    let mut l = vec![FIXED; 6];
    let s = merge_small_regions(&mut l, 3, 2, usize::MAX);
    assert_eq!((s.merged, s.kept_isolated), (0, 0));
    // A min_area larger than the image: everything ends in one label.
    let mut l = blobs(5, 13, 11, 5, false);
    let s = merge_small_regions(&mut l, 13, 11, usize::MAX);
    assert!(l.iter().all(|&x| x == l[0]));
    assert_eq!(s.kept_isolated, 1);
}

#[test]
fn merge_properties_on_random_images() {
    let sizes = [
        (1, 1),
        (1, 17),
        (23, 1),
        (2, 2),
        (7, 5),
        (31, 19),
        (40, 40),
        (64, 33),
    ];
    let mut case = 0u64;
    for &(w, h) in &sizes {
        for seed in 0..6u64 {
            for &min_area in &[2usize, 3, 5, 12, 50] {
                case += 1;
                let n_labels = 2 + (seed % 6) as u16;
                let start = blobs(case * 7 + seed, w, h, n_labels, seed % 3 != 0);
                let mut l = start.clone();
                let s = merge_small_regions(&mut l, w, h, min_area);
                let what = format!("{w}x{h} seed {seed} min_area {min_area}");

                // FIXED pixels unchanged, and nothing else becomes FIXED.
                for (a, b) in start.iter().zip(&l) {
                    assert_eq!(*a == FIXED, *b == FIXED, "{what}");
                }
                // No region below min_area except the kept ones, which touch no label.
                let small: Vec<_> = regions(&l, w, h)
                    .into_iter()
                    .filter(|r| r.1 < min_area)
                    .collect();
                assert_eq!(small.len(), s.kept_isolated, "{what}");
                for r in &small {
                    let region = region_of(&l, w, h, r.2);
                    assert!(borders(&l, w, h, &region).is_empty(), "{what}");
                }
                // The rule written out literally gives the same labels and merge count.
                let mut reference = start.clone();
                let merged = reference_merge(&mut reference, w, h, min_area);
                assert_eq!(l, reference, "{what}");
                assert_eq!(s.merged, merged, "{what}");
                assert!(s.passes >= 1, "{what}");
                // A second run has nothing left to do.
                let mut again = l.clone();
                let s2 = merge_small_regions(&mut again, w, h, min_area);
                assert_eq!(again, l, "{what}");
                assert_eq!(
                    (s2.merged, s2.kept_isolated),
                    (0, s.kept_isolated),
                    "{what}"
                );
            }
        }
    }
}

#[test]
fn merge_handles_large_regions_without_recursion() {
    // One 600×500 region with specks; flood fills are bounded by min_area, and the
    // labelling is iterative, so nothing here depends on the stack size.
    let (w, h) = (600, 500);
    let mut l = vec![2u16; w * h];
    for p in (0..w * h).step_by(997) {
        l[p] = 5;
    }
    let s = merge_small_regions(&mut l, w, h, 50);
    assert!(l.iter().all(|&x| x == 2));
    assert_eq!(s.merged, (w * h).div_ceil(997));
    // min_area above the image size: the fill walks the whole image.
    let mut l = vec![2u16; w * h];
    l[w * h / 2] = 5;
    let s = merge_small_regions(&mut l, w, h, w * h + 1);
    assert!(l.iter().all(|&x| x == 2));
    assert_eq!((s.merged, s.kept_isolated), (1, 1));
}
