//! The preview's legend, drawn so it can be read: for each class its colour, number, share
//! of the valid pixels and hectares; the nodata key with its share of the scene; and a scale
//! bar. Text is the 8 × 8 glyphs of `font8x8`, scaled with the preview (×1 up to 512 px
//! wide, ×2 up to 1024, ...).

use font8x8::{UnicodeFonts, BASIC_FONTS};

/// One legend line.
pub(super) struct LegendEntry {
    pub(super) colour: [u8; 3],
    pub(super) text: String,
}

/// The legend lines of a split: classes, then the nodata key.
pub(super) fn entries(doc: &super::ClassesDocument, colours: &[[u8; 3]]) -> Vec<LegendEntry> {
    let total = (doc.valid_pixels + doc.nodata_pixels).max(1) as f64;
    let mut out: Vec<LegendEntry> = doc
        .classes
        .iter()
        .zip(colours)
        .map(|(c, &colour)| LegendEntry {
            colour,
            text: match c.hectares {
                Some(ha) => format!(
                    "{:>3}  {:5.1}%  {} ha",
                    c.class,
                    c.share * 100.0,
                    round_ha(ha)
                ),
                None => format!("{:>3}  {:5.1}%", c.class, c.share * 100.0),
            },
        })
        .collect();
    out.push(LegendEntry {
        colour: [0, 0, 0],
        text: format!(
            "  0  nodata, {:.1}% of the scene",
            doc.nodata_pixels as f64 / total * 100.0
        ),
    });
    out
}

fn round_ha(ha: f64) -> String {
    if ha >= 100.0 {
        format!("{ha:.0}")
    } else if ha >= 1.0 {
        format!("{ha:.1}")
    } else {
        format!("{ha:.3}")
    }
}

/// Text scale for a preview `width` pixels wide.
fn text_scale(width: usize) -> usize {
    width.div_ceil(512).clamp(1, 4)
}

/// A round length (1, 2 or 5 × 10ⁿ metres) at most `max_m`, and its label.
fn round_length(max_m: f64) -> Option<(f64, String)> {
    if !(max_m.is_finite() && max_m > 0.0) {
        return None;
    }
    let p = 10f64.powf(max_m.log10().floor());
    let m = [5.0, 2.0, 1.0]
        .iter()
        .map(|f| f * p)
        .find(|&v| v <= max_m)?;
    let label = if m >= 1000.0 {
        format!("{} km", m / 1000.0)
    } else {
        format!("{m} m")
    };
    Some((m, label))
}

/// The map (`map_w × map_h` RGB) with the legend below it: returns the image and its size.
/// `metres_per_px`: ground size of one preview pixel, for the scale bar (none without it).
pub(super) fn with_legend(
    map: &[u8],
    map_w: usize,
    map_h: usize,
    entries: &[LegendEntry],
    metres_per_px: Option<f64>,
) -> (Vec<u8>, usize, usize) {
    let s = text_scale(map_w);
    let line = 12 * s;
    let longest = entries
        .iter()
        .map(|e| e.text.chars().count())
        .max()
        .unwrap_or(0);
    let width = map_w.max((longest + 4) * 8 * s);
    let bar = metres_per_px.and_then(|m| round_length(m * map_w as f64 / 4.0).map(|b| (b, m)));
    let height = map_h + 4 * s + line * (entries.len() + bar.is_some() as usize * 2);
    let mut rgb = vec![255u8; width * height * 3];
    for y in 0..map_h {
        rgb[y * width * 3..(y * width + map_w) * 3]
            .copy_from_slice(&map[y * map_w * 3..(y + 1) * map_w * 3]);
    }
    let mut put = |x: usize, y: usize, c: [u8; 3]| {
        if x < width && y < height {
            rgb[(y * width + x) * 3..(y * width + x) * 3 + 3].copy_from_slice(&c);
        }
    };
    let mut y0 = map_h + 4 * s;
    for e in entries {
        // Swatch with a thin grey frame (so white-ish colours and black nodata both show).
        for y in 0..8 * s {
            for x in 0..8 * s {
                let edge = x == 0 || y == 0 || x == 8 * s - 1 || y == 8 * s - 1;
                put(
                    2 * s + x,
                    y0 + y,
                    if edge { [128, 128, 128] } else { e.colour },
                );
            }
        }
        text(&mut put, 12 * s, y0, s, &e.text);
        y0 += line;
    }
    if let Some(((metres, label), m_per_px)) = bar {
        let px = (metres / m_per_px).round() as usize;
        y0 += line / 2;
        for y in 0..3 * s {
            for x in 0..px {
                put(2 * s + x, y0 + y, [0, 0, 0]);
            }
        }
        text(
            &mut put,
            2 * s + px + 4 * s,
            y0.saturating_sub(2 * s),
            s,
            &label,
        );
    }
    (rgb, width, height)
}

fn text(put: &mut impl FnMut(usize, usize, [u8; 3]), x0: usize, y0: usize, s: usize, t: &str) {
    for (i, ch) in t.chars().enumerate() {
        let Some(g) = BASIC_FONTS.get(ch) else {
            continue;
        };
        for (gy, bits) in g.iter().enumerate() {
            for gx in 0..8 {
                if bits & (1 << gx) != 0 {
                    for sy in 0..s {
                        for sx in 0..s {
                            put(x0 + (i * 8 + gx) * s + sx, y0 + gy * s + sy, [0, 0, 0]);
                        }
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_bar_lengths_are_round_and_fit() {
        assert_eq!(round_length(740.0), Some((500.0, "500 m".into())));
        assert_eq!(round_length(2600.0), Some((2000.0, "2 km".into())));
        assert_eq!(round_length(1.0), Some((1.0, "1 m".into())));
        assert_eq!(round_length(0.0), None);
    }

    #[test]
    fn legend_grows_with_the_preview_and_keeps_the_map() {
        let map = vec![7u8; 40 * 30 * 3];
        let entries = vec![
            LegendEntry {
                colour: [200, 0, 0],
                text: "  1   60.0%  12.5 ha".into(),
            },
            LegendEntry {
                colour: [0, 0, 0],
                text: "  0  nodata, 5.0% of the scene".into(),
            },
        ];
        let (rgb, w, h) = with_legend(&map, 40, 30, &entries, Some(10.0));
        assert!(w >= 40 && h > 30 + 2 * 12);
        assert_eq!(&rgb[..3], &[7, 7, 7]);
        // Text is drawn: some black pixels below the map.
        assert!(rgb[30 * w * 3..].chunks(3).any(|p| p == [0, 0, 0]));
        let big_map = vec![7u8; 1500 * 10 * 3];
        let (_, _, h2) = with_legend(&big_map, 1500, 10, &entries, None);
        assert_eq!(h2, 10 + 4 * 3 + 36 * 2, "text ×3 for a 1500 px preview");
    }
}
