//! Underbase white for dark substrates: printed first, under every pixel that any colour
//! plate inks, and choked (pulled back from the edges) so that it does not show around the
//! colours when plates register slightly off. Plus an optional highlight white printed
//! last on the lightest parts of the artwork.

use crate::error::Result;

use super::distance::squared_distance_to_background;
use super::{bad, Length, PlateImage, PlateRole};

/// Name of the underbase plate on the film.
pub const UNDERBASE_NAME: &str = "Underbase white";
/// Name of the highlight white plate on the film.
pub const HIGHLIGHT_NAME: &str = "Highlight white";

/// How much white the underbase lays down under a pixel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum UnderbaseFill {
    /// As much as the most of any colour plate there, so a fading tint fades on the
    /// substrate too (the underbase is screened like the colours).
    #[default]
    FollowInk,
    /// Solid under every inked pixel.
    Solid,
}

/// Underbase settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UnderbaseOptions {
    /// How far the underbase is pulled back from the edges of the inked area (an erosion
    /// by a disc of this radius). Default: 0.2 mm (our choice, about a thread spacing of a
    /// 125 threads-per-inch mesh).
    pub choke: Length,
    pub fill: UnderbaseFill,
}

impl Default for UnderbaseOptions {
    fn default() -> Self {
        UnderbaseOptions {
            choke: Length::Mm(0.2),
            fill: UnderbaseFill::default(),
        }
    }
}

/// The underbase of the colour plates among `plates` (all of one size, checked): a pixel
/// keeps its white when no un-inked pixel (nor the outside of the image) lies within the
/// choke distance of it, measured centre to centre.
pub fn underbase(plates: &[PlateImage], opts: &UnderbaseOptions, dpi: f64) -> Result<PlateImage> {
    super::check_dpi(dpi)?;
    let (w, h) = super::check_plates(plates)?;
    let choke = opts.choke.to_px(dpi, "underbase choke")?;
    let n = w as usize * h as usize;
    let mut most = vec![0u8; n];
    let mut colours = 0;
    for p in plates.iter().filter(|p| p.role == PlateRole::Colour) {
        colours += 1;
        for (m, &a) in most.iter_mut().zip(&p.amount) {
            *m = (*m).max(a);
        }
    }
    if colours == 0 {
        return Err(bad("an underbase needs at least one colour plate"));
    }
    let inked: Vec<bool> = most.iter().map(|&a| a > 0).collect();
    let d2 = squared_distance_to_background(&inked, w as usize, h as usize);
    let r2 = choke * choke;
    let amount = most
        .iter()
        .zip(&d2)
        .map(|(&a, &d)| {
            if a == 0 || d <= r2 {
                0
            } else {
                match opts.fill {
                    UnderbaseFill::FollowInk => a,
                    UnderbaseFill::Solid => 255,
                }
            }
        })
        .collect();
    Ok(PlateImage {
        ink: UNDERBASE_NAME.into(),
        number: 1,
        print_order: 1,
        width: w,
        height: h,
        amount,
        role: PlateRole::Underbase,
    })
}

/// Puts an underbase first in `plates` and moves every other plate's number and print
/// order up by one.
pub fn add_underbase(
    plates: &mut Vec<PlateImage>,
    opts: &UnderbaseOptions,
    dpi: f64,
) -> Result<()> {
    let ub = underbase(plates, opts, dpi)?;
    for p in plates.iter_mut() {
        p.number += 1;
        p.print_order += 1;
    }
    plates.insert(0, ub);
    Ok(())
}

/// A highlight white plate from RGBA artwork (8 bits per sample, row-major): solid where
/// the pixel is at least half opaque and its CIE L* (sRGB, D65) is at least
/// `min_lightness`. `number` and `print_order` place it (usually last).
pub fn highlight_white(
    rgba: &[u8],
    width: u32,
    height: u32,
    min_lightness: f64,
    number: usize,
    print_order: usize,
) -> Result<PlateImage> {
    if !(min_lightness.is_finite() && (0.0..=100.0).contains(&min_lightness)) {
        return Err(bad(format!(
            "the highlight white's lightness must be between 0 and 100 (L*; got {min_lightness})"
        )));
    }
    if rgba.len() as u64 != width as u64 * height as u64 * 4 {
        return Err(bad(format!(
            "the artwork has {} RGBA bytes for {width} × {height} pixels",
            rgba.len()
        )));
    }
    let amount = rgba
        .chunks_exact(4)
        .map(|px| {
            let l = crate::colour::srgb8_to_lab([px[0], px[1], px[2]])[0];
            if px[3] >= 128 && l >= min_lightness {
                255
            } else {
                0
            }
        })
        .collect();
    let mut plate = PlateImage::new(HIGHLIGHT_NAME, number, print_order, width, height, amount)?;
    plate.role = PlateRole::HighlightWhite;
    Ok(plate)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn underbase_follows_the_colours_and_renumbers() {
        let (w, h) = (20u32, 10u32);
        let a: Vec<u8> = (0..w * h)
            .map(|i| if i % w < 10 { 255 } else { 0 })
            .collect();
        let b: Vec<u8> = (0..w * h)
            .map(|i| if i % w >= 10 { 100 } else { 0 })
            .collect();
        let mut plates = vec![
            PlateImage::new("A", 1, 1, w, h, a).unwrap(),
            PlateImage::new("B", 2, 2, w, h, b).unwrap(),
        ];
        let opts = UnderbaseOptions {
            choke: Length::Px(0.0),
            fill: UnderbaseFill::FollowInk,
        };
        add_underbase(&mut plates, &opts, 300.0).unwrap();
        assert_eq!(plates[0].role, PlateRole::Underbase);
        assert_eq!((plates[1].number, plates[2].print_order), (2, 3));
        assert_eq!(plates[0].amount[0], 255);
        assert_eq!(plates[0].amount[15], 100);
        let solid = UnderbaseOptions {
            fill: UnderbaseFill::Solid,
            ..opts
        };
        assert_eq!(underbase(&plates, &solid, 300.0).unwrap().amount[15], 255);
        // Only the colour plates count: an underbase alone is refused.
        assert!(underbase(&plates[..1], &opts, 300.0).is_err());
        assert!(
            highlight_white(&[255, 255, 255, 255], 1, 1, 90.0, 4, 4)
                .unwrap()
                .amount
                == [255]
        );
        assert!(
            highlight_white(&[20, 20, 20, 255], 1, 1, 90.0, 4, 4)
                .unwrap()
                .amount
                == [0]
        );
    }
}
