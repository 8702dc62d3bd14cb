//! The attributes of each patch polygon: label number and name, ground area (per-pixel
//! areas of the CRS module summed over the patch) and mean uncertainty.

use super::labels::LabelSet;
use super::polygons::{patch_ids, vectorise, Patch};
use super::vector_out::PatchAttributes;
use crate::raster::geotiff::{GeoTags, PixelAreas};

/// The patches of `labelled` with their attributes, in patch order.
pub(super) fn patches_with_attributes(
    (w, h, geo): (usize, usize, &GeoTags),
    labelled: &[u8],
    set: &LabelSet,
    uncertainty: Option<&[f32]>,
) -> (Vec<Patch>, Vec<PatchAttributes>) {
    let patches = vectorise(labelled, w, h);
    let (ids, n) = patch_ids(labelled, w, h);
    let areas = PixelAreas::new(geo, w as u32, h as u32);
    let mut area = vec![0.0f64; n as usize + 1];
    let mut unc = vec![(0.0f64, 0u64); n as usize + 1];
    for (p, &i) in ids.iter().enumerate() {
        if i == 0 {
            continue;
        }
        let (x, y) = ((p % w) as u32, (p / w) as u32);
        area[i as usize] += areas.at(x, y).unwrap_or(0.0);
        if let Some(u) = uncertainty
            .map(|u| u[p])
            .filter(|u| *u >= 0.0 && u.is_finite())
        {
            unc[i as usize].0 += u as f64;
            unc[i as usize].1 += 1;
        }
    }
    let attrs = patches
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let i = k + 1;
            let label = set
                .labels
                .iter()
                .find(|l| l.number == p.value)
                .map(|l| l.name.clone())
                .unwrap_or_else(|| p.value.to_string());
            PatchAttributes {
                class: p.value,
                label,
                area_m2: areas.is_known().then_some(area[i]),
                mean_uncertainty: (uncertainty.is_some() && unc[i].1 > 0)
                    .then(|| unc[i].0 / unc[i].1 as f64),
            }
        })
        .collect();
    (patches, attrs)
}
