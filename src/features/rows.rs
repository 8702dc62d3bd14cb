//! Colour rows: the features of each histogram entry in the clustering space.

use crate::colour::{self, Space};
use crate::features::histogram::Histogram;
use rayon::prelude::*;

/// Features of each histogram entry in `space` (f32 rows) and CIELAB (for ΔE), each
/// entry read through its profile (see [`Histogram`]), so colours outside sRGB keep their
/// CIELAB.
pub fn entry_features(h: &Histogram, space: Space) -> (Vec<f32>, Vec<[f64; 3]>) {
    let reader = h.reader();
    let per: Vec<([f32; 3], [f64; 3])> = (0..h.len())
        .into_par_iter()
        .with_min_len(4096)
        .map(|i| {
            let lin = reader.linear(i);
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
