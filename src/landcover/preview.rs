//! The preview: class colours, a reduced class grid sampled during pass 2, and the PNG
//! with a legend strip below.

use crate::colour::{self, Space};
use crate::raster;
use std::io::Write;

/// Distinct, well-separated display colours for K classes: hues spread by the golden
/// angle in OKLab at two alternating lightness levels.
pub fn class_colours(k: usize) -> Vec<[u8; 3]> {
    (0..k)
        .map(|i| {
            let hue = (i as f64 * 137.507_764_05).to_radians();
            let l = if i % 2 == 0 { 0.62 } else { 0.80 };
            let c = 0.13;
            colour::space_to_srgb8([l, c * hue.cos(), c * hue.sin()], Space::Oklab)
        })
        .collect()
}

/// Longest side of the preview, in pixels (the scene is sampled every `step` pixels).
const PREVIEW_MAX_SIDE: usize = 2048;

/// The preview is at least this wide, so the legend fits.
const LEGEND_MIN_WIDTH: u32 = 64;

/// Width of one legend cell (swatch and number), in pixels.
const SWATCH_CELL: usize = 28;

/// Height of one legend row, in pixels.
const LEGEND_ROW: usize = 24;

/// 3 × 5 digit glyphs, one row of 3 bits per line (our own drawing).
const DIGITS: [[u8; 5]; 10] = [
    [7, 5, 5, 5, 7],
    [2, 6, 2, 2, 7],
    [7, 1, 7, 4, 7],
    [7, 1, 7, 1, 7],
    [5, 5, 7, 1, 1],
    [7, 4, 7, 1, 7],
    [7, 4, 7, 5, 7],
    [7, 1, 1, 1, 1],
    [7, 5, 7, 5, 7],
    [7, 5, 7, 1, 7],
];

/// Class numbers of every `step`-th pixel of every `step`-th row of the scene.
pub(super) struct PreviewGrid {
    /// Class per preview pixel, 0 for nodata.
    classes: Vec<u8>,
    width: u32,
    height: u32,
    step: u32,
}

impl PreviewGrid {
    /// An empty grid for a `w × h` scene, at most [`PREVIEW_MAX_SIDE`] on a side.
    pub(super) fn for_scene(w: u32, h: u32) -> Self {
        let step = (w.max(h) as usize).div_ceil(PREVIEW_MAX_SIDE).max(1) as u32;
        let (width, height) = (w.div_ceil(step), h.div_ceil(step));
        PreviewGrid {
            classes: vec![0u8; (width * height) as usize],
            width,
            height,
            step,
        }
    }

    /// Takes the preview's pixels from the classes of scene rows `y0..y0 + rows`, each
    /// `scene_w` pixels wide.
    pub(super) fn take_rows(&mut self, y0: u32, rows: u32, scene_w: u32, classes: &[u8]) {
        let step = self.step;
        for y in (y0..y0 + rows).filter(|y| y % step == 0) {
            for x in (0..scene_w).step_by(step as usize) {
                let p = ((y - y0) * scene_w + x) as usize;
                self.classes[((y / step) * self.width + x / step) as usize] = classes[p];
            }
        }
    }

    /// Writes the preview with the readable legend (classes with share and hectares, the
    /// nodata key, a scale bar when `metres_per_scene_px` is known) as an RGB PNG.
    pub(super) fn write_png_legend<W: Write>(
        &self,
        w: W,
        colours: &[[u8; 3]],
        entries: &[super::legend::LegendEntry],
        metres_per_scene_px: Option<f64>,
    ) -> std::io::Result<()> {
        let (mw, mh) = (self.width as usize, self.height as usize);
        let mut map = vec![0u8; mw * mh * 3];
        for (p, &c) in self.classes.iter().enumerate() {
            let col = if c == 0 {
                [0, 0, 0]
            } else {
                colours[c as usize - 1]
            };
            map[p * 3..p * 3 + 3].copy_from_slice(&col);
        }
        let per_px = metres_per_scene_px.map(|m| m * self.step as f64);
        let (rgb, width, height) = super::legend::with_legend(&map, mw, mh, entries, per_px);
        raster::write_rgb_png(w, width as u32, height as u32, &rgb)
    }
}

/// Height of the legend strip for `k` classes in an image `width` pixels wide.
fn legend_height(width: usize, k: usize) -> usize {
    let per_row = (width / SWATCH_CELL).max(1);
    let legend_rows = k.div_ceil(per_row).max(1);
    legend_rows * LEGEND_ROW + 4
}

/// The preview (class colours; nodata black) with a legend strip below: one swatch per
/// class with its number.
pub fn preview_with_legend(classes: &[u8], w: u32, h: u32, colours: &[[u8; 3]]) -> Vec<u8> {
    let width = w.max(LEGEND_MIN_WIDTH) as usize;
    let per_row = (width / SWATCH_CELL).max(1);
    let height = h as usize + legend_height(width, colours.len());
    let mut rgb = vec![255u8; width * height * 3];
    for y in 0..h as usize {
        for x in 0..w as usize {
            let c = classes[y * w as usize + x] as usize;
            let col = if c == 0 { [0, 0, 0] } else { colours[c - 1] };
            rgb[(y * width + x) * 3..(y * width + x) * 3 + 3].copy_from_slice(&col);
        }
    }
    let mut put = |x: usize, y: usize, c: [u8; 3]| {
        if x < width && y < height {
            rgb[(y * width + x) * 3..(y * width + x) * 3 + 3].copy_from_slice(&c);
        }
    };
    for (i, col) in colours.iter().enumerate() {
        let x0 = (i % per_row) * SWATCH_CELL + 2;
        let y0 = h as usize + 4 + (i / per_row) * LEGEND_ROW;
        for y in 0..10 {
            for x in 0..10 {
                put(x0 + x, y0 + y + 2, *col);
            }
        }
        // Class number, digits scaled ×2, to the right of the swatch.
        let label = (i + 1).to_string();
        for (di, ch) in label.bytes().enumerate() {
            let g = DIGITS[(ch - b'0') as usize];
            for (gy, bits) in g.iter().enumerate() {
                for gx in 0..3 {
                    if bits & (4 >> gx) != 0 {
                        for sy in 0..2 {
                            for sx in 0..2 {
                                put(
                                    x0 + 12 + di * 8 + gx * 2 + sx,
                                    y0 + 2 + gy * 2 + sy,
                                    [0, 0, 0],
                                );
                            }
                        }
                    }
                }
            }
        }
    }
    rgb
}
