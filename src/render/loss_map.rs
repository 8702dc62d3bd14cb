//! The loss map as a picture: per-pixel CIEDE2000 on a colour scale, with the scale and
//! its numbers drawn under the image.

use font8x8::{UnicodeFonts, BASIC_FONTS};

/// Stops of the colour scale, from ΔE2000 0 to the top of the scale: dark blue, blue,
/// green, yellow, white. Lightness rises with the loss, so the picture also reads in grey.
const STOPS: [[u8; 3]; 5] = [
    [16, 18, 48],
    [40, 86, 170],
    [52, 160, 110],
    [232, 200, 64],
    [255, 255, 255],
];

/// The scale's colour for `v` in 0..=`top` (above `top`: the last stop).
pub fn scale_colour(v: f32, top: f32) -> [u8; 3] {
    let t = (v / top).clamp(0.0, 1.0) * (STOPS.len() - 1) as f32;
    let i = (t.floor() as usize).min(STOPS.len() - 2);
    let f = t - i as f32;
    [0, 1, 2].map(|c| {
        let a = STOPS[i][c] as f32;
        let b = STOPS[i + 1][c] as f32;
        (a + (b - a) * f).round() as u8
    })
}

/// Colour of pixels that were not reduced (transparent in the input).
pub const NOT_REDUCED: [u8; 3] = [128, 128, 128];

const LEGEND_HEIGHT: u32 = 48;
const MIN_WIDTH: u32 = 220;

/// The loss map as RGB: the image (`values`, NaN where not reduced) on the scale, then a
/// legend band (the scale from 0 to `top`, ticks every `top / 4`, and the caption). The
/// picture is at least 220 pixels wide so the legend fits; returns (width, height, rgb).
pub fn loss_picture(width: u32, height: u32, values: &[f32], top: f32) -> (u32, u32, Vec<u8>) {
    let w = width.max(MIN_WIDTH);
    let h = height + LEGEND_HEIGHT;
    let mut rgb = vec![255u8; w as usize * h as usize * 3];
    for y in 0..height as usize {
        for x in 0..width as usize {
            let v = values[y * width as usize + x];
            let c = if v.is_nan() {
                NOT_REDUCED
            } else {
                scale_colour(v, top)
            };
            let o = (y * w as usize + x) * 3;
            rgb[o..o + 3].copy_from_slice(&c);
        }
    }
    // The caption, then the scale bar (10 px margin each side, 12 px high).
    let (x0, x1) = (10u32, w - 10);
    draw(&mut rgb, w, x0, height + 4, CAPTION);
    let bar_y = height + 16;
    for x in x0..x1 {
        let c = scale_colour((x - x0) as f32 / (x1 - 1 - x0) as f32 * top, top);
        for y in bar_y..bar_y + 12 {
            let o = (y as usize * w as usize + x as usize) * 3;
            rgb[o..o + 3].copy_from_slice(&c);
        }
    }
    // Ticks and numbers under the bar, and the caption at the right.
    for t in 0..=4u32 {
        let x = x0 + (x1 - 1 - x0) * t / 4;
        for y in bar_y + 12..bar_y + 15 {
            put(&mut rgb, w, x, y, [0, 0, 0]);
        }
        let label = if t == 4 {
            format!("{}+", (top as u32))
        } else {
            format!("{}", (top * t as f32 / 4.0).round() as u32)
        };
        let lw = label.len() as u32 * 8;
        let lx = x.saturating_sub(lw / 2).min(w.saturating_sub(lw));
        draw(&mut rgb, w, lx, bar_y + 16, &label);
    }
    (w, h, rgb)
}

/// The caption drawn above the scale: what the colours mean.
pub const CAPTION: &str = "dE2000 per pixel";

fn put(rgb: &mut [u8], w: u32, x: u32, y: u32, c: [u8; 3]) {
    let o = (y as usize * w as usize + x as usize) * 3;
    if o + 3 <= rgb.len() && x < w {
        rgb[o..o + 3].copy_from_slice(&c);
    }
}

fn draw(rgb: &mut [u8], w: u32, x: u32, y: u32, text: &str) {
    for (i, ch) in text.chars().enumerate() {
        let Some(glyph) = BASIC_FONTS.get(ch) else {
            continue;
        };
        for (row, bits) in glyph.iter().enumerate() {
            for col in 0..8u32 {
                if bits >> col & 1 == 1 {
                    put(rgb, w, x + i as u32 * 8 + col, y + row as u32, [0, 0, 0]);
                }
            }
        }
    }
}
