use super::*;
use crate::features::components::testing::{blobs, grid, XorShift};
use crate::features::merge::merge_small_regions;

const ENVELOPE: Method = Method::Envelope { wide: false };
const METHODS: [Method; 4] = [
    Method::Auto,
    Method::Bits,
    Method::Envelope { wide: false },
    Method::Envelope { wide: true },
];

/// Trap rule by direct search of the (2px + 1)² window around every pixel.
fn reference_trap(
    labels: &[u16],
    w: usize,
    h: usize,
    lightness: &[f64],
    is_ink: &[bool],
    px: u32,
) -> Vec<Vec<bool>> {
    let nl = is_ink.len();
    let ink = |l: usize| l < nl && is_ink[l] && l != FIXED as usize;
    let lum = |l: usize| lightness.get(l).copied().unwrap_or(f64::NAN);
    let r = px as i64;
    (0..nl)
        .map(|l| {
            (0..labels.len())
                .map(|p| {
                    let m = labels[p] as usize;
                    if m == l {
                        return ink(l);
                    }
                    if !(ink(l) && ink(m) && lum(m) < lum(l)) {
                        return false;
                    }
                    let (x, y) = ((p % w) as i64, (p / w) as i64);
                    for dy in -r..=r {
                        for dx in -r..=r {
                            let (nx, ny) = (x + dx, y + dy);
                            if dx * dx + dy * dy <= r * r
                                && nx >= 0
                                && ny >= 0
                                && nx < w as i64
                                && ny < h as i64
                                && labels[ny as usize * w + nx as usize] as usize == l
                            {
                                return true;
                            }
                        }
                    }
                    false
                })
                .collect()
        })
        .collect()
}

fn own_masks(labels: &[u16], is_ink: &[bool]) -> Vec<Vec<bool>> {
    (0..is_ink.len())
        .map(|l| {
            labels
                .iter()
                .map(|&m| m as usize == l && is_ink[l] && m != FIXED)
                .collect()
        })
        .collect()
}

fn mask_of(rows: &[&str]) -> Vec<bool> {
    rows.iter()
        .flat_map(|r| r.chars().map(|c| c == '#'))
        .collect()
}

/// A random trap problem: labels, lightness (with ties and a NaN), is_ink.
fn trap_case(seed: u64) -> (Vec<u16>, usize, usize, Vec<f64>, Vec<bool>) {
    let mut rng = XorShift::new(seed + 77);
    let w = 1 + rng.below(30) as usize;
    let h = 1 + rng.below(24) as usize;
    let nl = 1 + rng.below(7) as usize;
    let labels = blobs(seed, w, h, nl as u16 + 1, seed % 2 == 1);
    let levels = [15.0, 40.0, 40.0, 62.5, 90.0, f64::NAN];
    let lightness: Vec<f64> = (0..nl - (seed % 3 == 0) as usize)
        .map(|_| levels[rng.below(levels.len() as u64) as usize])
        .collect();
    let is_ink: Vec<bool> = (0..nl).map(|_| rng.below(5) != 0).collect();
    (labels, w, h, lightness, is_ink)
}

#[test]
fn px_zero_gives_exclusive_own_pixels() {
    for seed in 0..30 {
        let (labels, w, h, lightness, is_ink) = trap_case(seed);
        let masks = trap(&labels, w, h, &lightness, &is_ink, 0);
        assert_eq!(masks, own_masks(&labels, &is_ink), "seed {seed}");
        for p in 0..labels.len() {
            let count = masks.iter().filter(|m| m[p]).count();
            let l = labels[p] as usize;
            let expected = usize::from(l < is_ink.len() && is_ink[l]);
            assert_eq!(count, expected, "seed {seed} pixel {p}");
        }
    }
}

#[test]
fn light_pixel_in_dark_field_spreads_as_a_disc() {
    let mut labels = vec![1u16; 25];
    labels[12] = 0;
    let light = [90.0, 20.0];
    let ink = [true, true];
    let m = trap(&labels, 5, 5, &light, &ink, 1);
    assert_eq!(
        m[0],
        mask_of(&[".....", "..#..", ".###.", "..#..", "....."])
    );
    assert_eq!(m[1], labels.iter().map(|&l| l == 1).collect::<Vec<_>>());
    let m = trap(&labels, 5, 5, &light, &ink, 2);
    assert_eq!(
        m[0],
        mask_of(&["..#..", ".###.", "#####", ".###.", "..#.."])
    );
    // (±2, ±2) is √8 ≤ 3 away; (±3, ±1) is √10 > 3 away.
    let mut labels = vec![1u16; 49];
    labels[24] = 0;
    let m = trap(&labels, 7, 7, &light, &ink, 3);
    assert_eq!(
        m[0],
        mask_of(&["...#...", ".#####.", ".#####.", "#######", ".#####.", ".#####.", "...#..."])
    );
    assert_eq!(m[0].iter().filter(|&&b| b).count(), 29);
    // The dark ink never spreads into the lighter one.
    assert!(!m[1][24]);
}

#[test]
fn lighter_ink_spreads_under_darker_only() {
    let (labels, w, h) = grid(&[&[0, 0, 0, 1, 1, 1], &[0, 0, 0, 1, 1, 1]]);
    let m = trap(&labels, w, h, &[80.0, 30.0], &[true, true], 2);
    assert_eq!(m[0], mask_of(&["#####.", "#####."]));
    assert_eq!(m[1], mask_of(&["...###", "...###"]));
    // Swap the lightness: now ink 1 spreads.
    let m = trap(&labels, w, h, &[30.0, 80.0], &[true, true], 2);
    assert_eq!(m[0], mask_of(&["###...", "###..."]));
    assert_eq!(m[1], mask_of(&[".#####", ".#####"]));
}

#[test]
fn equal_lightness_neither_spreads() {
    let (labels, w, h) = grid(&[&[0, 0, 1, 1], &[0, 0, 1, 1]]);
    let m = trap(&labels, w, h, &[50.0, 50.0], &[true, true], 3);
    assert_eq!(m, own_masks(&labels, &[true, true]));
    // NaN or missing lightness: no spread either way.
    let m = trap(&labels, w, h, &[f64::NAN, 10.0], &[true, true], 3);
    assert_eq!(m, own_masks(&labels, &[true, true]));
    let m = trap(&labels, w, h, &[90.0], &[true, true], 3);
    assert_eq!(m, own_masks(&labels, &[true, true]));
}

#[test]
fn substrate_and_fixed_neither_spread_nor_receive() {
    // 0 = light ink, 1 = dark ink, 2 = substrate (darkest, but not an ink).
    let labels = [0u16, 0, 2, 1, 1, 1, 1];
    let m = trap(&labels, 7, 1, &[90.0, 30.0, 5.0], &[true, true, false], 2);
    // The spread reaches across the substrate by straight-line distance, never onto it.
    assert_eq!(m[0], mask_of(&["##.#..."]));
    assert_eq!(m[1], mask_of(&["...####"]));
    assert_eq!(m[2], vec![false; 7]);
    // A substrate lighter than every ink does not spread either.
    let labels = [2u16, 2, 1, 1];
    let m = trap(&labels, 4, 1, &[90.0, 30.0, 100.0], &[true, true, false], 2);
    assert_eq!(m, own_masks(&labels, &[true, true, false]));
    // FIXED pixels never receive.
    let labels = [0u16, FIXED, 1, FIXED];
    let m = trap(&labels, 2, 2, &[90.0, 30.0], &[true, true], 5);
    assert_eq!(m[0], vec![true, false, true, false]);
    // FIXED is never an ink, even with an is_ink entry for it.
    let mut ink = vec![true; FIXED as usize + 1];
    ink[2] = false;
    let mut light = vec![50.0; FIXED as usize + 1];
    light[FIXED as usize] = 99.0;
    let m = trap(&labels, 2, 2, &light, &ink, 5);
    assert_eq!(m.len(), FIXED as usize + 1);
    assert!(m[FIXED as usize].iter().all(|&b| !b));
    // More is_ink entries than there are labels: the extra masks stay empty.
    let ink = vec![true; 70_000];
    let light: Vec<f64> = (0..70_000).map(|l| l as f64).collect();
    let m = trap(&labels, 2, 2, &light, &ink, 5);
    assert_eq!(m.len(), 70_000);
    assert_eq!(m[1], vec![true, false, true, false]);
    assert!(m[FIXED as usize..]
        .iter()
        .all(|mask| mask.iter().all(|&b| !b)));
}

#[test]
fn trap_matches_window_search_on_random_images() {
    for seed in 0..60 {
        let (labels, w, h, lightness, is_ink) = trap_case(seed);
        for px in [1u32, 2, 3, 5] {
            let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
            let got = trap(&labels, w, h, &lightness, &is_ink, px);
            assert_eq!(got, want, "seed {seed} px {px} ({w}x{h})");
        }
    }
}

#[test]
fn trap_is_exact_by_brute_force_distances() {
    for seed in 100..140 {
        let (labels, w, h, lightness, is_ink) = trap_case(seed);
        let n = labels.len();
        let lum = |l: usize| lightness.get(l).copied().unwrap_or(f64::NAN);
        let ink = |l: usize| l < is_ink.len() && is_ink[l];
        for px in [1u32, 2, 4] {
            let masks = trap(&labels, w, h, &lightness, &is_ink, px);
            for (l, mask) in masks.iter().enumerate() {
                let pixels_of_l: Vec<usize> = (0..n).filter(|&q| labels[q] as usize == l).collect();
                // Squared distance from p to the nearest pixel of l, over all pixels.
                let nearest = |p: usize| {
                    let (x, y) = ((p % w) as i64, (p / w) as i64);
                    pixels_of_l
                        .iter()
                        .map(|&q| {
                            let (qx, qy) = ((q % w) as i64, (q / w) as i64);
                            (x - qx).pow(2) + (y - qy).pow(2)
                        })
                        .min()
                };
                for p in 0..n {
                    let m = labels[p] as usize;
                    if m == l {
                        assert_eq!(mask[p], ink(l), "own pixel, seed {seed}");
                        continue;
                    }
                    let within = nearest(p).is_some_and(|d| d <= (px * px) as i64);
                    let darker_ink = labels[p] != FIXED && ink(m) && lum(m) < lum(l);
                    if mask[p] {
                        // (a) a darker ink's pixel, (b) within px of a pixel of l.
                        assert!(darker_ink && ink(l), "seed {seed} px {px} l {l} p {p}");
                        assert!(within, "seed {seed} px {px} l {l} p {p}");
                    } else {
                        // (c) nothing within reach is missed.
                        assert!(
                            !(ink(l) && darker_ink && within),
                            "seed {seed} px {px} l {l} p {p}"
                        );
                    }
                }
            }
        }
    }
}

#[test]
fn trap_bands_and_wide_arithmetic_agree() {
    for seed in 200..230 {
        let (labels, w, h, lightness, is_ink) = trap_case(seed);
        for px in [1u32, 2, 3, 7, 33] {
            let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
            for rows in [None, Some(1), Some(2), Some(3), Some(5), Some(8)] {
                for method in METHODS {
                    let got = trap_impl(&labels, w, h, &lightness, &is_ink, px, rows, method);
                    assert_eq!(got, want, "seed {seed} px {px} rows {rows:?} {method:?}");
                }
            }
        }
    }
}

#[test]
fn packing_and_row_dilation() {
    let mut rng = XorShift::new(5);
    for len in [0usize, 1, 7, 8, 63, 64, 65, 127, 128, 129, 200] {
        let src: Vec<u16> = (0..len).map(|_| rng.below(3) as u16).collect();
        let words = len.div_ceil(64) + 1;
        let mut dst = vec![u64::MAX; words];
        let any = pack_with(&src, &mut dst, |v| v == 1);
        let bit = |d: &[u64], i: usize| d[i / 64] >> (i % 64) & 1 == 1;
        for i in 0..words * 64 {
            assert_eq!(bit(&dst, i), src.get(i) == Some(&1), "len {len} bit {i}");
        }
        assert_eq!(any, src.contains(&1));
        let mut wider = vec![0u64; words];
        dilate_row(&dst, &mut wider);
        for i in 0..len {
            let near = (i.saturating_sub(1)..=(i + 1).min(len - 1)).any(|j| src[j] == 1);
            assert_eq!(bit(&wider, i), near, "len {len} bit {i}");
        }
    }
}

#[test]
fn trap_on_rows_of_several_words_matches_window_search() {
    for (k, &w) in [63usize, 64, 65, 128, 129, 200].iter().enumerate() {
        let h = 9 + k;
        let labels = blobs(400 + k as u64, w, h, 5, k % 2 == 0);
        let lightness = [80.0, 20.0, 50.0, 50.0, 95.0];
        let is_ink = [true, true, true, true, false];
        for px in [1u32, 2, 4, 6] {
            let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
            for rows in [None, Some(1), Some(4)] {
                for method in METHODS {
                    let got = trap_impl(&labels, w, h, &lightness, &is_ink, px, rows, method);
                    assert_eq!(got, want, "w {w} px {px} rows {rows:?} {method:?}");
                }
            }
        }
    }
}

#[test]
fn trap_with_many_inks_matches_window_search() {
    // More than FEW_INKS inks: the bands first look for the labels near them.
    for seed in 0..6u64 {
        let mut rng = XorShift::new(seed + 900);
        let (w, h) = (20 + rng.below(50) as usize, 10 + rng.below(30) as usize);
        let nl = FEW_INKS + 2 + rng.below(30) as usize;
        let labels = blobs(seed + 901, w, h, nl as u16 + 3, true);
        let lightness: Vec<f64> = (0..nl).map(|_| rng.below(12) as f64 * 8.0).collect();
        let is_ink: Vec<bool> = (0..nl).map(|_| rng.below(6) != 0).collect();
        for px in [1u32, 3, 40] {
            let want = reference_trap(&labels, w, h, &lightness, &is_ink, px);
            for rows in [None, Some(3)] {
                for method in METHODS {
                    let got = trap_impl(&labels, w, h, &lightness, &is_ink, px, rows, method);
                    assert_eq!(got, want, "seed {seed} px {px} rows {rows:?} {method:?}");
                }
            }
        }
    }
}

#[test]
fn trap_with_huge_px_covers_every_darker_pixel() {
    let (labels, w, h, lightness, is_ink) = trap_case(9);
    let diagonal = ((w * w + h * h) as f64).sqrt().ceil() as u32;
    let want = reference_trap(&labels, w, h, &lightness, &is_ink, diagonal);
    assert_eq!(trap(&labels, w, h, &lightness, &is_ink, u32::MAX), want);
    assert_eq!(trap(&labels, w, h, &lightness, &is_ink, diagonal), want);
}

#[test]
fn trap_of_degenerate_input() {
    let light = [90.0, 20.0];
    let ink = [true, true];
    assert_eq!(
        trap(&[], 0, 0, &light, &ink, 3),
        vec![Vec::<bool>::new(); 2]
    );
    assert_eq!(
        trap(&[], 0, 7, &light, &ink, 3),
        vec![Vec::<bool>::new(); 2]
    );
    assert!(trap(&[0, 1], 2, 1, &light, &[], 3).is_empty());
    // Length not width × height: own pixels only.
    let labels = [0u16, 1, 1, 0, 1];
    let m = trap(&labels, 2, 2, &light, &ink, 3);
    assert_eq!(m, own_masks(&labels, &ink));
    let m = trap(&labels, usize::MAX, 2, &light, &ink, 3);
    assert_eq!(m, own_masks(&labels, &ink));
    // Labels beyond is_ink are not inks.
    let labels = [0u16, 5, 5, 1];
    let m = trap(&labels, 4, 1, &light, &ink, 3);
    assert_eq!(m[0], vec![true, false, false, true]);
    assert_eq!(m[1], vec![false, false, false, true]);
    // Single pixel and single row or column.
    assert_eq!(
        trap(&[1], 1, 1, &light, &ink, 4),
        vec![vec![false], vec![true]]
    );
    let m = trap(&[0, 1, 1, 1, 1, 1], 1, 6, &light, &ink, 4);
    assert_eq!(m[0], vec![true, true, true, true, true, false]);
}

#[test]
fn results_do_not_depend_on_thread_count() {
    let (w, h) = (301, 257);
    let labels = blobs(42, w, h, 6, true);
    let light = [95.0, 70.0, 55.0, 55.0, 30.0, 10.0];
    let ink = [true, true, true, true, false, true];
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut l = labels.clone();
            let s = merge_small_regions(&mut l, w, h, 20);
            let bits = trap_impl(&l, w, h, &light, &ink, 3, Some(4), Method::Bits);
            let envelope = trap_impl(&l, w, h, &light, &ink, 3, Some(4), ENVELOPE);
            assert_eq!(bits, envelope);
            (l, s, bits)
        })
    };
    let one = run(1);
    assert_eq!(one, run(2));
    assert_eq!(one, run(3));
    assert_eq!(one.2, reference_trap(&one.0, w, h, &light, &ink, 3));
}
