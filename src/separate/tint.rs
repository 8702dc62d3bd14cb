//! How a tinted ink prints: the Murray–Davies relation (A. Murray, 1936). A halftone of
//! dot area `a` reflects `a · R_ink + (1 − a) · R_paper`. We apply it per channel to linear
//! sRGB values as stand-ins for reflectance (a simplification of ours), with the substrate
//! as paper, and take the `a` that best matches the artwork colour (least squares, clamped
//! to 0..1). The ink choice, the reported ΔE2000, the plates and the proof all use this
//! one model, so what is scored is what the films print.

use super::select::CostTable;
use crate::colour::{self, adapt, delta_e2000, inks::Ink};
use rayon::prelude::*;

/// Tints at or above this dot area print solid, and below [`MIN_TINT`] not at all (our
/// choice: a 3 % dot or a 3 % hole does not hold on a screen, common practice).
pub const MAX_TINT: f64 = 0.97;
pub const MIN_TINT: f64 = 0.03;

/// Linear sRGB of an 8-bit colour.
pub fn linear(c: [u8; 3]) -> [f64; 3] {
    c.map(|v| colour::srgb_to_linear(v as f64 / 255.0))
}

/// Dot area of `ink` over `paper` that best reproduces `pixel`, all in linear sRGB, in
/// 0..=1.
pub fn area_linear(pixel: [f64; 3], ink: [f64; 3], paper: [f64; 3]) -> f64 {
    let mut num = 0.0;
    let mut den = 0.0;
    for c in 0..3 {
        num += (pixel[c] - paper[c]) * (ink[c] - paper[c]);
        den += (ink[c] - paper[c]) * (ink[c] - paper[c]);
    }
    if den < 1e-12 {
        return 1.0;
    }
    (num / den).clamp(0.0, 1.0)
}

/// Dot area of `ink` over `paper` that best reproduces `pixel` (8-bit sRGB), in 0..=1.
pub fn murray_davies_area(pixel: [u8; 3], ink: [u8; 3], paper: [u8; 3]) -> f64 {
    area_linear(linear(pixel), linear(ink), linear(paper))
}

/// The amount (0..=255) a plate prints for a dot area: solid from [`MAX_TINT`], nothing
/// below [`MIN_TINT`].
pub fn amount(area: f64) -> u8 {
    if area >= MAX_TINT {
        255
    } else if area < MIN_TINT {
        0
    } else {
        (area * 255.0).round() as u8
    }
}

/// Linear sRGB of `ink` printed at `amount` (0..=255) over `paper`.
pub fn printed(amount: u8, ink: [f64; 3], paper: [f64; 3]) -> [f64; 3] {
    let a = amount as f64 / 255.0;
    [0, 1, 2].map(|c| a * ink[c] + (1.0 - a) * paper[c])
}

/// Turns a cost table of solid inks into one of tinted inks: the cost of colour `e` with
/// ink `i` becomes the ΔE2000 between `e` and what ink `i` prints for it: the tint of the
/// best dot area in linear light (or nothing: the substrate), unless the solid ink is
/// nearer. No cost grows, so tints never make the ink choice worse. Returns each pair's amount, `n × m`, row-major.
pub fn tinted_costs(
    table: &mut CostTable,
    entry_linear: &[[f64; 3]],
    entry_labs: &[[f64; 3]],
    inks: &[Ink],
    paper: [u8; 3],
) -> Vec<u8> {
    let m = table.m;
    let paper_lin = linear(paper);
    let paper_lab = adapt::linear_to_lab_d50(paper_lin);
    let ink_lin: Vec<[f64; 3]> = inks
        .iter()
        .map(|i| linear(colour::parse_hex(&i.hex).unwrap_or([0, 0, 0])))
        .collect();
    let mut amounts = vec![0u8; table.n * m];
    table
        .cost
        .par_chunks_mut(m * 1024)
        .zip(amounts.par_chunks_mut(m * 1024))
        .enumerate()
        .for_each(|(c, (costs, amts))| {
            for (o, (row, arow)) in costs.chunks_mut(m).zip(amts.chunks_mut(m)).enumerate() {
                let e = c * 1024 + o;
                for j in 0..m {
                    let a = amount(area_linear(entry_linear[e], ink_lin[j], paper_lin));
                    let tinted = match a {
                        255 => row[j],
                        0 => delta_e2000(entry_labs[e], paper_lab) as f32,
                        _ => delta_e2000(
                            entry_labs[e],
                            adapt::linear_to_lab_d50(printed(a, ink_lin[j], paper_lin)),
                        ) as f32,
                    };
                    // The closest tint in linear light is not always the closest to the
                    // eye: where the solid ink is nearer, it prints solid.
                    (arow[j], row[j]) = if tinted < row[j] {
                        (a, tinted)
                    } else {
                        (255, row[j])
                    };
                }
            }
        });
    amounts
}

/// Per pixel, the amount its own plate prints (255 for the substrate, transparent pixels
/// and solid inks), from the final labels (`order[l]` is plate `l`'s library ink).
pub fn pixel_amounts(
    labels: &[u16],
    pixel_entry: &[u32],
    amounts: &[u8],
    m: usize,
    order: &[usize],
) -> Vec<u8> {
    labels
        .par_iter()
        .zip(pixel_entry.par_iter())
        .with_min_len(1 << 14)
        .map(|(&l, &e)| match order.get(l as usize) {
            Some(&i) => amounts[e as usize * m + i],
            None => 255,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn murray_davies_inverts_its_own_mix() {
        // A 40 % dot of the ink over the paper, mixed in linear light, gives back 40 %.
        let (ink, paper) = ([200u8, 30, 40], [16u8, 16, 16]);
        let mix = colour::linear_to_srgb8(printed(102, linear(ink), linear(paper)));
        let a = murray_davies_area(mix, ink, paper);
        assert!((a - 0.4).abs() < 0.01, "{a}");
        assert_eq!(murray_davies_area(ink, ink, paper), 1.0);
        assert_eq!(murray_davies_area(paper, ink, paper), 0.0);
    }

    #[test]
    fn amounts_hold_on_a_screen() {
        assert_eq!(amount(0.02), 0);
        assert_eq!(amount(0.5), 128);
        assert_eq!(amount(0.98), 255);
    }
}
