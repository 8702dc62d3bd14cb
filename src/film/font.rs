//! Text on the film: the 8 × 8 bitmap glyphs of the `font8x8` crate (Basic Latin and
//! Latin-1), scaled by whole pixels. A character it has no glyph for prints as '?'.

use font8x8::{UnicodeFonts, BASIC_FONTS, LATIN_FONTS};

use super::Bitmap;

/// Typographic punctuation the font lacks, as the plain character it stands for (a job
/// name typed as "Spring – 2027" keeps its dash).
pub(super) fn plain(c: char) -> char {
    match c {
        '\u{2010}'..='\u{2015}' | '\u{2212}' => '-',
        '\u{2018}' | '\u{2019}' | '\u{201A}' | '\u{2032}' => '\'',
        '\u{201C}' | '\u{201D}' | '\u{201E}' | '\u{2033}' => '"',
        '\u{2026}' => '.',
        '\u{2022}' | '\u{00B7}' => '*',
        '\u{00A0}' | '\u{2009}' | '\u{202F}' => ' ',
        other => other,
    }
}

/// Glyph rows, top first; bit 0 of a row is its leftmost pixel.
fn glyph(c: char) -> [u8; 8] {
    let c = plain(c);
    BASIC_FONTS
        .get(c)
        .or_else(|| LATIN_FONTS.get(c))
        .or_else(|| BASIC_FONTS.get('?'))
        .unwrap_or([0; 8])
}

/// Width in pixels of `text` at `scale` (8 × scale per character).
pub fn text_width(text: &str, scale: u32) -> u64 {
    text.chars().count() as u64 * 8 * scale as u64
}

/// Draws `text` with its top-left corner at (x, y), each glyph pixel a `scale` square.
pub fn draw_text(page: &mut Bitmap, x: i64, y: i64, scale: u32, text: &str) {
    let s = scale as i64;
    for (k, c) in text.chars().enumerate() {
        let g = glyph(c);
        let gx = x + k as i64 * 8 * s;
        for (row, bits) in g.iter().enumerate() {
            for col in 0..8 {
                if bits & (1 << col) != 0 {
                    let px = gx + col as i64 * s;
                    let py = y + row as i64 * s;
                    page.fill_rect(px, py, px + s, py + s, true);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn letters_are_drawn_left_to_right() {
        // 'L': a vertical stroke on the left and a foot to the right at the bottom.
        let mut b = Bitmap::new(8, 8).unwrap();
        draw_text(&mut b, 0, 0, 1, "L");
        let left: u64 = b.count_ink(0, 0, 4, 8);
        let right: u64 = b.count_ink(4, 0, 4, 8);
        assert!(left > right, "left {left} right {right}");
        assert!(b.count_ink(0, 0, 8, 3) < b.count_ink(0, 5, 8, 3) + 3);
        assert_eq!(text_width("abc", 2), 48);
    }

    #[test]
    fn typographic_dashes_and_quotes_print_as_their_plain_forms() {
        let draw = |t: &str| {
            let mut b = Bitmap::new(24, 8).unwrap();
            draw_text(&mut b, 0, 0, 1, t);
            (0..3)
                .map(|k| b.count_ink(k * 8, 0, 8, 8))
                .collect::<Vec<_>>()
        };
        // U+2013 and U+2014 (dashes) as '-', U+201C/U+201D (quotes) as '"': not '?'.
        assert_eq!(draw("a\u{2013}b"), draw("a-b"));
        assert_eq!(draw("\u{2014}\u{201C}\u{201D}"), draw("-\"\""));
        assert_ne!(draw("a\u{2013}b"), draw("a?b"));
    }
}
