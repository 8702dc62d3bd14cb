//! Property tests: colour conversions, CIEDE2000, the k-means objectives and the
//! weighted histogram, each checked on many generated inputs (proptest).
//!
//! Each property names where it comes from: a definition in a standard or paper that
//! the implementation must satisfy, not a value computed by this project.

use chromasift::cluster::{kmeans_plus_plus, lloyd, soft_kmeans, split_merge, Dataset, Stop};
use chromasift::colour::{delta_e2000, space_to_srgb8, srgb8_to_lab, srgb8_to_oklab, Space};
use chromasift::histogram::{from_rgba16, from_rgba8, Histogram, TRANSPARENT};
use chromasift::raster::Decoded;
use chromasift::reduce::{reduce_image, ReduceOptions};
use chromasift::rng::Rng;
use proptest::prelude::*;

fn rgb() -> impl Strategy<Value = [u8; 3]> {
    any::<[u8; 3]>()
}

// ---- Colour conversions ----

proptest! {
    #![proptest_config(ProptestConfig::with_cases(100_000))]

    /// sRGB8 → CIELAB → sRGB8 returns the same code values. IEC 61966-2-1 (sRGB) and
    /// CIE 15:2004 (CIELAB) define both directions as exact inverses, and 8-bit code
    /// values are 1/255 apart, far more than the f64 round-off of the two trips.
    #[test]
    fn srgb8_through_cielab_is_exact(c in rgb()) {
        prop_assert_eq!(space_to_srgb8(srgb8_to_lab(c), Space::Cielab), c);
    }

    /// sRGB8 → OKLab → sRGB8 within one code value per channel. OKLab (Ottosson 2020) is
    /// defined by printed matrices; the trip out uses the ones in `src/colour` and the trip
    /// back those of the `palette` crate, which are inverse only to their printed digits,
    /// so one code value is the bound asked of it.
    #[test]
    fn srgb8_through_oklab_within_one_code_value(c in rgb()) {
        let back = space_to_srgb8(srgb8_to_oklab(c), Space::Oklab);
        for ch in 0..3 {
            prop_assert!((back[ch] as i32 - c[ch] as i32).abs() <= 1, "{:?} -> {:?}", c, back);
        }
    }
}

// ---- CIEDE2000 ----

proptest! {
    #![proptest_config(ProptestConfig::with_cases(100_000))]

    /// CIEDE2000 (CIE 142-2001; Sharma, Wu & Dalal 2005, eqs. 1–22) is built only from
    /// pair means, absolute values and squared differences, so it is symmetric in its two
    /// samples and never negative.
    #[test]
    fn ciede2000_symmetric_and_non_negative(a in rgb(), b in rgb()) {
        let (la, lb) = (srgb8_to_lab(a), srgb8_to_lab(b));
        let ab = delta_e2000(la, lb);
        let ba = delta_e2000(lb, la);
        prop_assert!(ab >= 0.0 && ab.is_finite(), "{}", ab);
        prop_assert!((ab - ba).abs() <= 1e-9 * ab.max(1.0), "{} vs {}", ab, ba);
    }

    /// ΔE00 is zero for a colour and itself, and above zero for any two different sRGB8
    /// colours: their CIELAB values differ (the conversion is one-to-one), and the
    /// formula's lightness, chroma and hue terms are zero together only for equal Lab.
    #[test]
    fn ciede2000_zero_only_for_equal_colours(a in rgb(), b in rgb()) {
        let (la, lb) = (srgb8_to_lab(a), srgb8_to_lab(b));
        prop_assert_eq!(delta_e2000(la, la), 0.0);
        if a != b {
            prop_assert!(delta_e2000(la, lb) > 0.0, "{:?} {:?}", a, b);
        }
    }

    /// Arbitrary Lab triples (also outside the sRGB gamut), same two properties.
    #[test]
    fn ciede2000_symmetric_on_any_lab(
        a in (0.0..100.0f64, -128.0..128.0f64, -128.0..128.0f64),
        b in (0.0..100.0f64, -128.0..128.0f64, -128.0..128.0f64),
    ) {
        let (la, lb) = ([a.0, a.1, a.2], [b.0, b.1, b.2]);
        let ab = delta_e2000(la, lb);
        prop_assert!(ab >= 0.0 && ab.is_finite());
        prop_assert!((ab - delta_e2000(lb, la)).abs() <= 1e-9 * ab.max(1.0));
        if la != lb {
            prop_assert!(ab > 0.0);
        }
    }
}

// ---- k-means objectives ----

/// Weighted rows in three dimensions with values spread continuously (so exact distance
/// ties, where the order of summation could decide a label, do not occur).
fn weighted_rows(max_n: usize) -> impl Strategy<Value = (Vec<f32>, Vec<f64>)> {
    (3..max_n).prop_flat_map(|n| {
        (
            prop::collection::vec(-50.0f32..50.0, n * 3),
            prop::collection::vec(0.0f64..20.0, n),
        )
    })
}

fn weighted_sse(rows: &[f32], w: &[f64], means: &[f64]) -> f64 {
    rows.chunks_exact(3)
        .zip(w)
        .map(|(x, &wi)| {
            means
                .chunks_exact(3)
                .map(|m| (0..3).map(|t| (x[t] as f64 - m[t]).powi(2)).sum::<f64>())
                .fold(f64::INFINITY, f64::min)
                * wi
        })
        .sum()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(600))]

    /// Lloyd (1982): the assignment step and the mean step each can only lower the
    /// weighted SSE, so over iterations 1, 2, 3, … from one start it never rises.
    #[test]
    fn lloyd_never_raises_the_sse((rows, w) in weighted_rows(80), k in 1usize..6, seed in any::<u64>()) {
        let data = Dataset::new(&rows, 3, Some(&w)).unwrap();
        let init = kmeans_plus_plus(&data, k, &mut Rng::new(seed, 0));
        prop_assume!(!init.is_empty());
        let mut prev = f64::INFINITY;
        for it in 1..=12 {
            for accelerate in [false, true] {
                let r = lloyd(&data, &init, Stop::exact(it), accelerate);
                // Recomputed here in f64 as well as reported.
                let own = weighted_sse(&rows, &w, &r.means);
                prop_assert!((own - r.sse).abs() <= 1e-4 * own.max(1.0), "{} vs {}", own, r.sse);
                prop_assert!(r.sse <= prev * (1.0 + 1e-6) + 1e-9, "iteration {}: {} after {}", it, r.sse, prev);
                if accelerate {
                    prev = r.sse;
                }
            }
        }
    }

    /// Split-and-merge moves (after Kaukoranta, Fränti & Nevalainen 1998) keep a move only
    /// if Lloyd from it lowers the SSE: the result is never above the Lloyd optimum it
    /// started from, and the reported SSE is that of the returned means.
    #[test]
    fn split_merge_never_raises_the_sse((rows, w) in weighted_rows(80), k in 2usize..7, seed in any::<u64>()) {
        let data = Dataset::new(&rows, 3, Some(&w)).unwrap();
        let init = kmeans_plus_plus(&data, k, &mut Rng::new(seed, 0));
        prop_assume!(!init.is_empty());
        let stop = Stop::exact(100);
        let start = lloyd(&data, &init, stop, true).sse;
        let r = split_merge(&data, &init, 8, stop);
        prop_assert_eq!(r.start_sse, start);
        prop_assert!(r.sse <= start, "{} after {}", r.sse, start);
        prop_assert!(r.moves > 0 || r.sse == start);
        let means: Vec<f64> = r.means.iter().map(|&v| v as f64).collect();
        let own = weighted_sse(&rows, &w, &means);
        prop_assert!((own - r.sse).abs() <= 1e-4 * own.max(1.0), "{} vs {}", own, r.sse);
    }

    /// Soft k-means as in MacKay (2003), ch. 20 and §22.4: each responsibility update and
    /// mean update is one step of coordinate descent on the free energy
    /// F = −(1/β) Σ_i w_i ln Σ_k exp(−β d_ik), so the reported F never rises. The
    /// allowance covers the single-precision exponentials (relative error about 1e-7).
    #[test]
    fn soft_kmeans_free_energy_never_rises(
        (rows, w) in weighted_rows(80),
        k in 2usize..6,
        seed in any::<u64>(),
        beta in 0.001f64..2.0,
    ) {
        let data = Dataset::new(&rows, 3, Some(&w)).unwrap();
        let init: Vec<f64> = kmeans_plus_plus(&data, k, &mut Rng::new(seed, 0))
            .into_iter().map(f64::from).collect();
        prop_assume!(init.len() == k * 3);
        let r = soft_kmeans(&data, &init, beta, 40, 0.0);
        let scale = data.total_weight() / beta;
        for pair in r.free_energy.windows(2) {
            let allowance = 1e-6 * (pair[0].abs() + scale);
            prop_assert!(pair[1] <= pair[0] + allowance, "{:?}", r.free_energy);
        }
        // The same trajectory, cut short: runs of 1, 2, … iterations are its prefixes.
        let short = soft_kmeans(&data, &init, beta, 3, 0.0);
        prop_assert_eq!(&short.free_energy[..], &r.free_energy[..short.iterations]);
    }

    /// Lloyd's iterations depend on the set of weighted rows, not their order: the same
    /// start on permuted rows gives the same means and SSE (to summation round-off), and
    /// each row keeps its label.
    #[test]
    fn lloyd_is_invariant_to_row_order(
        (rows, w) in weighted_rows(60),
        k in 1usize..5,
        seed in any::<u64>(),
        shuffle in any::<u64>(),
    ) {
        let data = Dataset::new(&rows, 3, Some(&w)).unwrap();
        let init = kmeans_plus_plus(&data, k, &mut Rng::new(seed, 0));
        prop_assume!(!init.is_empty());
        let n = w.len();
        let mut order: Vec<usize> = (0..n).collect();
        let mut rng = Rng::new(shuffle, 1);
        for i in (1..n).rev() {
            order.swap(i, rng.below(i + 1));
        }
        let p_rows: Vec<f32> = order.iter().flat_map(|&i| rows[i * 3..i * 3 + 3].to_vec()).collect();
        let p_w: Vec<f64> = order.iter().map(|&i| w[i]).collect();
        let p_data = Dataset::new(&p_rows, 3, Some(&p_w)).unwrap();
        let a = lloyd(&data, &init, Stop::exact(100), true);
        let b = lloyd(&p_data, &init, Stop::exact(100), true);
        prop_assert!((a.sse - b.sse).abs() <= 1e-6 * a.sse.max(1.0), "{} vs {}", a.sse, b.sse);
        for (x, y) in a.means.iter().zip(&b.means) {
            prop_assert!((x - y).abs() <= 1e-4 * x.abs().max(1.0), "{:?} vs {:?}", a.means, b.means);
        }
        for (new_pos, &old) in order.iter().enumerate() {
            if w[old] > 0.0 {
                prop_assert_eq!(a.labels[old], b.labels[new_pos]);
            }
        }
    }
}

// ---- Weighted histogram ----

/// Small RGBA8 images drawn from a few colours (so entries repeat) with some pixels
/// fully transparent.
fn image8() -> impl Strategy<Value = Vec<u8>> {
    (1usize..400).prop_flat_map(|n| {
        prop::collection::vec(
            (
                0u8..6,
                0u8..4,
                0u8..3,
                prop::sample::select(vec![0u8, 7, 255, 255, 255]),
            ),
            n,
        )
        .prop_map(|px| {
            px.into_iter()
                .flat_map(|(r, g, b, a)| [r * 50, g * 80, b * 120, a])
                .collect()
        })
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(1000))]

    /// A histogram counts pixels, so (by the definition of counting) the histogram of an
    /// image equals the sum of the histograms of any split of its pixels.
    #[test]
    fn histogram_of_image_equals_merge_of_any_split(
        px in image8(),
        cuts in prop::collection::vec(any::<prop::sample::Index>(), 0..5),
    ) {
        let n = px.len() / 4;
        let mut at: Vec<usize> = cuts.iter().map(|c| c.index(n + 1)).collect();
        at.push(0);
        at.push(n);
        at.sort_unstable();
        let parts: Vec<Histogram> = at
            .windows(2)
            .filter(|s| s[1] > s[0])
            .map(|s| from_rgba8(&px[s[0] * 4..s[1] * 4]).histogram)
            .collect();
        let whole = from_rgba8(&px).histogram;
        prop_assert_eq!(Histogram::merge(&parts).unwrap(), whole.clone());
        prop_assert_eq!(whole.total() as usize, px.chunks_exact(4).filter(|p| p[3] != 0).count());
    }

    /// The same for 16-bit samples.
    #[test]
    fn sixteen_bit_histogram_equals_merge_of_any_split(
        px in prop::collection::vec((0u16..4, 0u16..3, 0u16..3, 0u16..2), 1..300),
        cut in any::<prop::sample::Index>(),
    ) {
        let flat: Vec<u16> = px.iter().flat_map(|&(r, g, b, a)| [r * 21845, g * 30000, b * 7, a * 65535]).collect();
        let m = cut.index(px.len() + 1) * 4;
        let whole = from_rgba16(&flat).histogram;
        let parts: Vec<Histogram> = [&flat[..m], &flat[m..]]
            .iter()
            .filter(|p| !p.is_empty())
            .map(|p| from_rgba16(p).histogram)
            .collect();
        prop_assert_eq!(Histogram::merge(&parts).unwrap(), whole);
    }

    /// Permuting the pixels leaves the histogram unchanged (entries are sorted by colour)
    /// and moves each pixel's entry index with it.
    #[test]
    fn histogram_is_invariant_to_pixel_order(px in image8(), shuffle in any::<u64>()) {
        let n = px.len() / 4;
        let mut order: Vec<usize> = (0..n).collect();
        let mut rng = Rng::new(shuffle, 2);
        for i in (1..n).rev() {
            order.swap(i, rng.below(i + 1));
        }
        let permuted: Vec<u8> = order.iter().flat_map(|&i| px[i * 4..i * 4 + 4].to_vec()).collect();
        let a = from_rgba8(&px);
        let b = from_rgba8(&permuted);
        prop_assert_eq!(&a.histogram, &b.histogram);
        for (new_pos, &old) in order.iter().enumerate() {
            prop_assert_eq!(a.pixel_entry[old], b.pixel_entry[new_pos]);
            if px[old * 4 + 3] == 0 {
                prop_assert_eq!(a.pixel_entry[old], TRANSPARENT);
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(120))]

    /// The whole weighted-histogram path of plain k-means (histogram, k-means++ with a
    /// fixed seed, Lloyd, palette) sees only the sorted histogram, so a reordered image gets
    /// the same palette document and every pixel the same palette index. (The default
    /// objective, which keeps colour families, and the lost-area report look at where
    /// colours sit in the image, so they are left out here by design.)
    #[test]
    fn reduction_is_invariant_to_pixel_order(px in image8(), shuffle in any::<u64>(), k in 1usize..5) {
        let n = px.len() / 4;
        prop_assume!(px.chunks_exact(4).any(|p| p[3] != 0));
        let mut order: Vec<usize> = (0..n).collect();
        let mut rng = Rng::new(shuffle, 3);
        for i in (1..n).rev() {
            order.swap(i, rng.below(i + 1));
        }
        let permuted: Vec<u8> = order.iter().flat_map(|&i| px[i * 4..i * 4 + 4].to_vec()).collect();
        let opts = ReduceOptions {
            objective: chromasift::families::Objective::Plain,
            ..ReduceOptions::new(k)
        };
        let mut a = reduce_image(&Decoded::from_rgba8(n as u32, 1, px.clone()), &opts).unwrap();
        let mut b = reduce_image(&Decoded::from_rgba8(n as u32, 1, permuted), &opts).unwrap();
        a.document.lost_areas.clear();
        b.document.lost_areas.clear();
        prop_assert_eq!(&a.palette, &b.palette);
        prop_assert_eq!(&a.document, &b.document);
        for (new_pos, &old) in order.iter().enumerate() {
            prop_assert_eq!(a.pixel_index[old], b.pixel_index[new_pos]);
        }
    }
}
