use super::testing::{blobs, grid, reference_regions, XorShift};
use super::*;

#[test]
fn regions_use_8_connectivity_and_skip_fixed() {
    let (l, w, h) = grid(&[&[1, 2, 1], &[2, 1, 2], &[1, 2, 1]]);
    assert_eq!(regions(&l, w, h), vec![(1, 5, 0), (2, 4, 1)]);
    let (l, w, h) = grid(&[&[1, 2, 1], &[2, FIXED, 2], &[1, 2, 1]]);
    assert_eq!(
        regions(&l, w, h),
        vec![(1, 1, 0), (2, 4, 1), (1, 1, 2), (1, 1, 6), (1, 1, 8)]
    );
}

#[test]
fn regions_join_branches_that_meet_late() {
    // A U shape and a W shape: branches first seen apart are joined by a later row.
    let (l, w, h) = grid(&[
        &[3, 0, 3, 0, 3, 0, 0],
        &[3, 0, 3, 0, 0, 3, 0],
        &[3, 0, 3, 0, 0, 0, 3],
        &[0, 3, 0, 3, 0, 3, 0],
        &[0, 0, 0, 0, 3, 0, 0],
    ]);
    assert_eq!(regions(&l, w, h), reference_regions(&l, w, h));
    let threes: Vec<_> = regions(&l, w, h).into_iter().filter(|r| r.0 == 3).collect();
    assert_eq!(threes, vec![(3, 13, 0)]);
}

#[test]
fn regions_match_breadth_first_search_on_random_images() {
    for seed in 0..40 {
        let mut rng = XorShift::new(seed + 1000);
        let w = 1 + rng.below(40) as usize;
        let h = 1 + rng.below(30) as usize;
        let l = blobs(seed, w, h, 1 + rng.below(6) as u16, seed % 2 == 0);
        let r = regions(&l, w, h);
        assert_eq!(r, reference_regions(&l, w, h), "seed {seed}");
        let total: usize = r.iter().map(|x| x.1).sum();
        assert_eq!(total, l.iter().filter(|&&x| x != FIXED).count());
    }
}

#[test]
fn labelling_does_not_depend_on_bands() {
    for seed in 0..30 {
        let mut rng = XorShift::new(seed + 3000);
        let w = 1 + rng.below(50) as usize;
        let h = 1 + rng.below(40) as usize;
        let l = blobs(seed + 50, w, h, 1 + rng.below(5) as u16, seed % 3 != 0);
        let want = reference_regions(&l, w, h);
        for band_rows in [1, 2, 3, 7, h] {
            let mut got = Vec::new();
            components::<u32>(&l, w, h, band_rows, |a, b, c| got.push((a, b, c)));
            assert_eq!(got, want, "seed {seed} band_rows {band_rows}");
            let mut got = Vec::new();
            components::<usize>(&l, w, h, band_rows, |a, b, c| got.push((a, b, c)));
            assert_eq!(got, want, "seed {seed} band_rows {band_rows}");
        }
    }
}

#[test]
fn regions_of_degenerate_input() {
    assert!(regions(&[], 0, 0).is_empty());
    assert!(regions(&[], 0, 5).is_empty());
    assert!(regions(&[], 5, 0).is_empty());
    assert!(regions(&[1, 2, 3], 2, 2).is_empty());
    assert!(regions(&[1, 2, 3], usize::MAX, 2).is_empty());
    assert!(regions(&[FIXED; 4], 2, 2).is_empty());
    assert_eq!(regions(&[7], 1, 1), vec![(7, 1, 0)]);
    assert_eq!(
        regions(&[7, 7, 8, 7], 4, 1),
        vec![(7, 2, 0), (8, 1, 2), (7, 1, 3)]
    );
    assert_eq!(
        regions(&[7, 7, 8, 7], 1, 4),
        vec![(7, 2, 0), (8, 1, 2), (7, 1, 3)]
    );
}
