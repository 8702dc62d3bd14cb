//! What a reduction reports and reads about colours: the areas it rendered far from their
//! colour (the lost-area report) and the colours a user pins, as text.

use super::{min_family_pixels, REPORT_DELTA_E, SMALL_AREA_PIXELS, STRONG_DELTA_E};
use crate::colour::{self, Space};
use crate::features::components;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// An area of the image rendered far from its colour (more than [`REPORT_DELTA_E`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LostArea {
    /// Pixels in the area (8-connected pixels each farther than the limit).
    pub pixels: u64,
    /// Bounding box: left, top, width, height, in pixels.
    pub x: u32,
    pub y: u32,
    pub width: u32,
    pub height: u32,
    /// Source colour of the area (`#rrggbb`): the mean of its most common shade, see
    /// [`lost_areas`]; and its CIELAB (D65).
    pub source: String,
    pub source_lab: [f64; 3],
    /// The palette colour most of the area took.
    pub rendered: String,
    /// Mean CIEDE2000 between the area's source pixels and their palette colours.
    pub delta_e2000: f64,
}

/// Areas whose every pixel is more than [`REPORT_DELTA_E`] from its palette colour, largest
/// first (ties: raster order): those of at least [`min_family_pixels`] pixels, and the
/// smaller ones of at least [`SMALL_AREA_PIXELS`] that are rendered on average at least
/// [`STRONG_DELTA_E`] from their colour and are solid (at least half of their
/// pixels have a horizontal and a vertical neighbour in the area, so a one-pixel line,
/// such as the mixed colours of an anti-aliased border, is not one). A small dot in a
/// colour unlike anything else is reported in an image of any size.
/// `entry_error` is each histogram entry's CIEDE2000 to its palette colour;
/// `pixel_index` is each pixel's index into `palette` as written (after any dithering).
///
/// An area is 8-connected and its pixels' colours are all nearest (CIELAB) to one palette
/// colour, so touching areas of different colours that went to different palette colours
/// are reported apart. Its source colour is the mean of its most common shade (its pixels
/// binned into CIELAB cubes [`SHADE`] wide), a colour the area holds, not the mean of all
/// its pixels, which for a mixed area can be a colour it does not hold.
pub fn lost_areas(
    width: u32,
    height: u32,
    pixel_entry: &[u32],
    entry_error: &[f64],
    pixel_index: &[u16],
    labs: &[[f64; 3]],
    palette: &[[u8; 3]],
) -> Vec<LostArea> {
    let (w, h) = (width as usize, height as usize);
    if pixel_entry.len() != w * h || pixel_entry.is_empty() {
        return Vec::new();
    }
    let opaque = pixel_entry
        .par_iter()
        .with_min_len(1 << 16)
        .filter(|&&e| e != crate::features::histogram::TRANSPARENT)
        .count();
    let min_pixels = min_family_pixels(opaque as f64) as usize;
    let palette_lab: Vec<[f64; 3]> = palette.iter().map(|&c| colour::srgb8_to_lab(c)).collect();
    // Each lost entry's nearest palette colour (CIELAB), the area label of its pixels.
    let nearest: Vec<u16> = labs
        .par_iter()
        .zip(entry_error.par_iter())
        .with_min_len(4096)
        .map(|(lab, &err)| {
            if err <= REPORT_DELTA_E {
                return components::FIXED;
            }
            (0..palette_lab.len())
                .min_by(|&a, &b| {
                    dist2(lab, &palette_lab[a]).total_cmp(&dist2(lab, &palette_lab[b]))
                })
                .map_or(0, |j| j as u16)
        })
        .collect();
    let marks: Vec<u16> = pixel_entry
        .par_iter()
        .with_min_len(1 << 16)
        .map(|&e| {
            if e != crate::features::histogram::TRANSPARENT {
                nearest[e as usize]
            } else {
                components::FIXED
            }
        })
        .collect();
    let mut out = Vec::new();
    let mut flood = components::Flood::new(marks.len());
    for (_, size, first) in components::regions(&marks, w, h) {
        if size < SMALL_AREA_PIXELS {
            continue;
        }
        flood.small_region(&marks, w, h, first, usize::MAX);
        let pixels = &flood.pixels;
        if size < min_pixels {
            let error: f64 = pixels
                .iter()
                .map(|&p| entry_error[pixel_entry[p] as usize])
                .sum();
            if error / (size as f64) < STRONG_DELTA_E
                || solid_share(pixels, &marks, w, h) < SOLID_SHARE
            {
                continue;
            }
        }
        out.push(describe(
            pixels,
            w,
            pixel_entry,
            entry_error,
            pixel_index,
            labs,
            palette,
        ));
    }
    out.sort_by_key(|a| std::cmp::Reverse(a.pixels));
    out
}

/// The report of one area: `pixels` are its pixel indices.
fn describe(
    pixels: &[usize],
    w: usize,
    pixel_entry: &[u32],
    entry_error: &[f64],
    pixel_index: &[u16],
    labs: &[[f64; 3]],
    palette: &[[u8; 3]],
) -> LostArea {
    let (mut x0, mut y0, mut x1, mut y1) = (usize::MAX, usize::MAX, 0, 0);
    let mut err = 0.0f64;
    // Shade cube → (pixels, summed CIELAB, first pixel in fill order).
    let mut shades: HashMap<[i32; 3], (usize, [f64; 3], usize)> = HashMap::new();
    let mut took: HashMap<u16, usize> = HashMap::new();
    for &p in pixels {
        let (x, y) = (p % w, p / w);
        x0 = x0.min(x);
        y0 = y0.min(y);
        x1 = x1.max(x);
        y1 = y1.max(y);
        let e = pixel_entry[p] as usize;
        let key = labs[e].map(|v| (v / SHADE).floor() as i32);
        let order = shades.len();
        let shade = shades.entry(key).or_insert((0, [0.0; 3], order));
        shade.0 += 1;
        for (sum, v) in shade.1.iter_mut().zip(labs[e]) {
            *sum += v;
        }
        err += entry_error[e];
        if let Some(&s) = pixel_index
            .get(p)
            .filter(|&&s| (s as usize) < palette.len())
        {
            *took.entry(s).or_insert(0) += 1;
        }
    }
    let n = pixels.len() as f64;
    let (count, sum, _) = shades
        .values()
        .max_by(|a, b| a.0.cmp(&b.0).then(b.2.cmp(&a.2)))
        .copied()
        .unwrap_or((1, [0.0; 3], 0));
    let lab = sum.map(|v| v / count as f64);
    let slot = took
        .iter()
        .max_by(|a, b| a.1.cmp(b.1).then(b.0.cmp(a.0)))
        .map(|(&s, _)| s)
        .unwrap_or(0);
    LostArea {
        pixels: pixels.len() as u64,
        x: x0 as u32,
        y: y0 as u32,
        width: (x1 - x0 + 1) as u32,
        height: (y1 - y0 + 1) as u32,
        source: colour::hex(colour::space_to_srgb8(lab, Space::Cielab)),
        source_lab: lab,
        rendered: palette
            .get(slot as usize)
            .map_or_else(|| "none".into(), |&c| colour::hex(c)),
        delta_e2000: err / n,
    }
}

/// Share of an area's pixels that have a horizontal and a vertical 4-neighbour in the
/// area (the area's label in `marks`): inside a dot or a patch two or more pixels wide,
/// not on a one-pixel line or a scatter of specks.
fn solid_share(pixels: &[usize], marks: &[u16], w: usize, h: usize) -> f64 {
    let solid = pixels
        .iter()
        .filter(|&&p| {
            let (x, y, l) = (p % w, p / w, marks[p]);
            let across = (x > 0 && marks[p - 1] == l) || (x + 1 < w && marks[p + 1] == l);
            let down = (y > 0 && marks[p - w] == l) || (y + 1 < h && marks[p + w] == l);
            across && down
        })
        .count();
    solid as f64 / pixels.len().max(1) as f64
}

/// Share of a small area's pixels that must be solid (see [`lost_areas`]): on the enlarged
/// photographs and posters of the fixtures, the small areas more than ΔE2000 20 off that
/// are mostly one pixel wide are the mixed colours of soft borders.
const SOLID_SHARE: f64 = 0.5;

/// Width of the CIELAB cubes an area's pixels are binned into to find its most common
/// shade (ΔE*ab units): half the report limit, so a shade holds colours that look alike.
const SHADE: f64 = REPORT_DELTA_E / 2.0;

fn dist2(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    (0..3).map(|d| (a[d] - b[d]).powi(2)).sum()
}

/// One warning line for lost areas (empty when there are none). `given_palette`: the
/// palette was given (`apply`, `batch --palette`), so the remedy is to add the colour to
/// it rather than to raise `k` or pin the colour.
pub fn lost_areas_warning(areas: &[LostArea], given_palette: bool) -> Option<String> {
    let a = areas.first()?;
    let more = match areas.len() {
        1 => String::new(),
        n => format!(" and {} more", n - 1),
    };
    Some(format!(
        "{} area{} rendered more than ΔE2000 {} from {} colour (largest: {} px at x {}..{}, \
         y {}..{}, {} shown as {}, ΔE2000 {:.1}{more}); {}",
        areas.len(),
        if areas.len() == 1 { "" } else { "s" },
        REPORT_DELTA_E,
        if areas.len() == 1 { "its" } else { "their" },
        a.pixels,
        a.x,
        a.x + a.width - 1,
        a.y,
        a.y + a.height - 1,
        a.source,
        a.rendered,
        a.delta_e2000,
        if given_palette {
            "add the colour to the palette"
        } else {
            "raise k or pin the colour"
        },
    ))
}

/// A colour given as `#rrggbb` (or `rrggbb`), or as CIELAB (D65) `L,a,b` (commas or
/// spaces between the numbers), as the sRGB8 colour that will be written. A CIELAB value
/// whose nearest sRGB8 colour is more than ΔE2000 1 away is refused as out of gamut.
pub fn parse_colour(s: &str) -> Result<[u8; 3], String> {
    let t = s.trim();
    if t.is_empty() {
        return Err("empty colour (give #rrggbb or L,a,b)".into());
    }
    if t.starts_with('#') || (t.len() == 6 && t.chars().all(|c| c.is_ascii_hexdigit())) {
        return colour::parse_hex(t);
    }
    let parts: Vec<&str> = t
        .split(|c: char| c == ',' || c.is_whitespace())
        .filter(|p| !p.is_empty())
        .collect();
    let nums: Vec<f64> = parts
        .iter()
        .map(|p| p.parse::<f64>())
        .collect::<Result<_, _>>()
        .map_err(|_| format!("'{t}' is neither #rrggbb nor three CIELAB numbers L,a,b"))?;
    if nums.len() != 3 || nums.iter().any(|v| !v.is_finite()) {
        return Err(format!(
            "'{t}' is neither #rrggbb nor three CIELAB numbers L,a,b"
        ));
    }
    let lab = [nums[0], nums[1], nums[2]];
    if !(0.0..=100.0).contains(&lab[0]) {
        return Err(format!(
            "CIELAB L must be between 0 and 100 (got {})",
            lab[0]
        ));
    }
    let c = colour::space_to_srgb8(lab, Space::Cielab);
    let off = colour::delta_e2000(lab, colour::srgb8_to_lab(c));
    if off > 1.0 {
        return Err(format!(
            "CIELAB {t} is outside sRGB: the nearest sRGB colour, {}, is ΔE2000 {off:.1} away",
            colour::hex(c)
        ));
    }
    Ok(c)
}
