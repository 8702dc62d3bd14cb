//! Rendering from per-entry results: remapping to palette indices, Floyd–Steinberg
//! dithering, and uncertainty maps. Per-pixel work is table look-ups.

pub mod chart;
pub mod loss_map;

use crate::features::histogram::TRANSPARENT;
use rayon::prelude::*;

/// Palette index of a pixel that takes no part (alpha = 0).
pub const NO_INDEX: u16 = u16::MAX;

/// Error-diffusion choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Dither {
    /// Each pixel takes its own entry's palette colour.
    None,
    /// Floyd–Steinberg error diffusion (Floyd & Steinberg 1976) in the clustering space,
    /// left to right, top to bottom.
    FloydSteinberg,
}

impl std::str::FromStr for Dither {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "none" => Ok(Dither::None),
            "floyd-steinberg" | "fs" => Ok(Dither::FloydSteinberg),
            _ => Err(format!(
                "unknown dithering '{s}' (use none or floyd-steinberg)"
            )),
        }
    }
}

impl Dither {
    /// Name as on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Dither::None => "none",
            Dither::FloydSteinberg => "floyd-steinberg",
        }
    }
}

/// Palette index of every pixel from the index of its entry: a parallel look-up.
pub fn remap(pixel_entry: &[u32], entry_index: &[u16]) -> Vec<u16> {
    pixel_entry
        .par_iter()
        .with_min_len(1 << 14)
        .map(|&e| {
            if e == TRANSPARENT {
                NO_INDEX
            } else {
                entry_index[e as usize]
            }
        })
        .collect()
}

/// Floyd–Steinberg dithering: each pixel's feature (of its entry) plus the diffused
/// error takes the nearest palette feature; the error spreads 7/16 right, 3/16 down-left,
/// 5/16 down and 1/16 down-right. Transparent pixels neither take nor pass on error.
pub fn dither_floyd_steinberg(
    width: usize,
    pixel_entry: &[u32],
    entry_features: &[f32],
    palette_features: &[f32],
    dim: usize,
) -> Vec<u16> {
    let mut out = vec![NO_INDEX; pixel_entry.len()];
    let mut cur = vec![0.0f32; (width + 2) * dim];
    let mut next = vec![0.0f32; (width + 2) * dim];
    let mut v = vec![0.0f32; dim];
    for (y, row) in pixel_entry.chunks_exact(width).enumerate() {
        for (x, &e) in row.iter().enumerate() {
            if e == TRANSPARENT {
                continue;
            }
            let f = &entry_features[e as usize * dim..(e as usize + 1) * dim];
            for d in 0..dim {
                v[d] = f[d] + cur[(x + 1) * dim + d];
            }
            let (s, _, _) = crate::cluster::nearest_two(&v, palette_features, dim);
            out[y * width + x] = s as u16;
            let p = &palette_features[s * dim..(s + 1) * dim];
            for d in 0..dim {
                let q = v[d] - p[d];
                cur[(x + 2) * dim + d] += q * (7.0 / 16.0);
                next[x * dim + d] += q * (3.0 / 16.0);
                next[(x + 1) * dim + d] += q * (5.0 / 16.0);
                next[(x + 2) * dim + d] += q * (1.0 / 16.0);
            }
        }
        std::mem::swap(&mut cur, &mut next);
        next.iter_mut().for_each(|x| *x = 0.0);
    }
    out
}

/// 8-bit uncertainty map: round(255 × normalised entropy); transparent pixels are 0.
pub fn uncertainty_u8(pixel_entry: &[u32], entry_uncertainty: &[f32]) -> Vec<u8> {
    // Rounded once per distinct colour, then looked up per pixel.
    let level: Vec<u8> = entry_uncertainty
        .iter()
        .map(|&u| (u * 255.0).round().clamp(0.0, 255.0) as u8)
        .collect();
    pixel_entry
        .par_iter()
        .with_min_len(1 << 14)
        .map(|&e| {
            if e == TRANSPARENT {
                0
            } else {
                level[e as usize]
            }
        })
        .collect()
}

/// Float uncertainty map (0..1); transparent pixels are 0.
pub fn uncertainty_f32(pixel_entry: &[u32], entry_uncertainty: &[f32]) -> Vec<f32> {
    pixel_entry
        .par_iter()
        .with_min_len(1 << 14)
        .map(|&e| {
            if e == TRANSPARENT {
                0.0
            } else {
                entry_uncertainty[e as usize]
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fifty_percent_grey_dithers_to_half_black_half_white() {
        // One-dimensional "lightness" feature: 50 between palette values 0 and 100.
        let width = 8;
        let entries = vec![0u32; width * 8];
        let out = dither_floyd_steinberg(width, &entries, &[50.0], &[0.0, 100.0], 1);
        let white = out.iter().filter(|&&i| i == 1).count();
        assert_eq!(white, 32, "{out:?}");
    }

    #[test]
    fn transparent_pixels_keep_no_index() {
        let out = remap(&[0, TRANSPARENT, 1], &[3, 4]);
        assert_eq!(out, vec![3, NO_INDEX, 4]);
        assert_eq!(uncertainty_u8(&[0, TRANSPARENT], &[1.0]), vec![255, 0]);
    }
}
