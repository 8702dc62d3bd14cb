//! Colour rows: the features of each histogram entry in the clustering space.

use crate::colour::profile::SourceProfile;
use crate::colour::{self, Space};
use crate::features::histogram::Histogram;
use rayon::prelude::*;

/// Features of each histogram entry in `space` (f32 rows) and CIELAB (for ΔE), the
/// entries read as sRGB.
pub fn entry_features(h: &Histogram, space: Space) -> (Vec<f32>, Vec<[f64; 3]>) {
    entry_features_in(h, space, None)
}

/// As [`entry_features`], the entries' numbers read through `profile` when given (an
/// image's embedded ICC profile): colours outside sRGB keep their CIELAB.
pub fn entry_features_in(
    h: &Histogram,
    space: Space,
    profile: Option<&SourceProfile>,
) -> (Vec<f32>, Vec<[f64; 3]>) {
    let conv = profile.map(|p| p.to_linear());
    let scale = if h.depth == 8 { 255.0 } else { 65535.0 };
    let per: Vec<([f32; 3], [f64; 3])> = h
        .colours
        .par_iter()
        .with_min_len(4096)
        .map(|c| {
            let lin = match &conv {
                Some(t) => t.linear(c.map(|v| v as f64 / scale)),
                None => h.linear(c),
            };
            let lab = colour::linear_to_lab(lin);
            let f = match space {
                Space::Cielab => lab,
                Space::Oklab => colour::linear_to_oklab(lin),
            };
            ([f[0] as f32, f[1] as f32, f[2] as f32], lab)
        })
        .collect();
    let mut rows = Vec::with_capacity(per.len() * 3);
    let mut labs = Vec::with_capacity(per.len());
    for (f, l) in per {
        rows.extend_from_slice(&f);
        labs.push(l);
    }
    (rows, labs)
}
