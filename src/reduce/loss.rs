//! What a reduction lost, pixel by pixel: the CIEDE2000 between each source pixel and its
//! reduced pixel, its 95th and 99th percentiles, and the loss map files.

use super::Reduction;
use crate::colour;
use crate::features::histogram::TRANSPARENT;
use crate::render::{loss_map, NO_INDEX};
use rayon::prelude::*;

/// The top of the loss map's colour scale, in ΔE2000: pixels at or above it are white.
/// Lost areas are reported from ΔE2000 10, so 20 leaves room above that.
pub const LOSS_SCALE_MAX: f32 = 20.0;

/// Each entry's palette index (that of its first pixel) and whether every pixel of each
/// entry took that index (always, unless the image was dithered).
fn entry_indices(red: &Reduction) -> (Vec<u16>, bool) {
    let mut idx = vec![NO_INDEX; red.entry_lab.len()];
    let mut uniform = true;
    for (&e, &i) in red.pixel_entry.iter().zip(&red.pixel_index) {
        if e == TRANSPARENT || i == NO_INDEX {
            continue;
        }
        let slot = &mut idx[e as usize];
        if *slot == NO_INDEX {
            *slot = i;
        } else if *slot != i {
            uniform = false;
        }
    }
    (idx, uniform)
}

fn palette_lab(red: &Reduction) -> Vec<[f64; 3]> {
    red.palette
        .iter()
        .map(|&c| colour::srgb8_to_lab(c))
        .collect()
}

/// Per-pixel CIEDE2000 between the source pixel and its reduced pixel (NaN where the
/// pixel was transparent and not reduced), in pixel order.
pub fn pixel_delta_e2000(red: &Reduction) -> Vec<f32> {
    let pal = palette_lab(red);
    let (idx, _) = entry_indices(red);
    let per_entry: Vec<f32> = idx
        .par_iter()
        .zip(red.entry_lab.par_iter())
        .with_min_len(4096)
        .map(|(&i, lab)| {
            if i == NO_INDEX {
                f32::NAN
            } else {
                colour::delta_e2000(*lab, pal[i as usize]) as f32
            }
        })
        .collect();
    red.pixel_entry
        .par_iter()
        .zip(red.pixel_index.par_iter())
        .with_min_len(1 << 14)
        .map(|(&e, &i)| {
            if e == TRANSPARENT || i == NO_INDEX {
                f32::NAN
            } else if idx[e as usize] == i {
                per_entry[e as usize]
            } else {
                colour::delta_e2000(red.entry_lab[e as usize], pal[i as usize]) as f32
            }
        })
        .collect()
}

/// The smallest value that at least `q` of the total weight is within, from (value,
/// weight) pairs sorted by value.
fn percentile(sorted: &[(f64, u64)], total: u64, q: f64) -> f64 {
    let need = q * total as f64;
    let mut run = 0u64;
    for &(v, w) in sorted {
        run += w;
        if run as f64 >= need {
            return v;
        }
    }
    sorted.last().map_or(0.0, |p| p.0)
}

/// Records the 95th and 99th percentiles of the per-pixel CIEDE2000 in the document.
/// Without dithering every pixel of an entry has the entry's error, so the entries are
/// weighed by their pixels instead of listing every pixel.
pub(super) fn record_percentiles(red: &mut Reduction) {
    let (idx, uniform) = entry_indices(red);
    let mut pairs: Vec<(f64, u64)> = if uniform {
        // Without dithering a pixel's error is its entry's, which the scoring computed
        // with the same palette colours (`entry_error`); computed here when it did not.
        let known = red.entry_error.len() == idx.len();
        let pal = if known { Vec::new() } else { palette_lab(red) };
        let mut counts = vec![0u64; idx.len()];
        for &e in &red.pixel_entry {
            if e != TRANSPARENT {
                counts[e as usize] += 1;
            }
        }
        idx.par_iter()
            .zip(red.entry_lab.par_iter())
            .zip(counts.par_iter())
            .enumerate()
            .filter(|(_, ((&i, _), &n))| i != NO_INDEX && n > 0)
            .map(|(e, ((&i, lab), &n))| {
                let d = if known {
                    red.entry_error[e]
                } else {
                    colour::delta_e2000(*lab, pal[i as usize])
                };
                (d, n)
            })
            .collect()
    } else {
        pixel_delta_e2000(red)
            .into_iter()
            .filter(|v| !v.is_nan())
            .map(|v| (v as f64, 1))
            .collect()
    };
    if pairs.is_empty() {
        return;
    }
    pairs.par_sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let total: u64 = pairs.iter().map(|p| p.1).sum();
    red.document.p95_delta_e2000 = Some(percentile(&pairs, total, 0.95));
    red.document.p99_delta_e2000 = Some(percentile(&pairs, total, 0.99));
}

/// The loss map picture (PNG bytes): the per-pixel CIEDE2000 on a colour scale from 0 to
/// [`LOSS_SCALE_MAX`], with the scale under the image.
pub fn loss_map_png(
    red: &Reduction,
    values: &[f32],
    w: &mut impl std::io::Write,
) -> std::io::Result<()> {
    let (pw, ph, rgb) = loss_map::loss_picture(red.width, red.height, values, LOSS_SCALE_MAX);
    crate::raster::write_rgb_png(w, pw, ph, &rgb)
}
