//! Films from a separation: the plates as [`film::PlateImage`]s (solid, or tinted when
//! tints are on, by the model of `tint.rs`), the film set, the stacked proof and per-plate
//! previews, and the check that a run's outputs never mix with an earlier run's.

use super::regions::FIXED;
use super::Separation;
use crate::colour::{self, inks::Ink};
use crate::error::{ParamsError, Result};
use crate::film::{
    self, FilmFormats, FilmOptions, FilmSet, Halftone, MinFeature, PlateImage, PlateRole,
    UnderbaseOptions,
};
use std::path::{Path, PathBuf};

/// Substrates darker than this CIE L* get a note suggesting an underbase (our rule of
/// thumb, in line with common practice: below mid-grey, colours printed straight onto the
/// garment lose most of their brightness).
pub const DARK_SUBSTRATE_LIGHTNESS: f64 = 50.0;

/// Default lightness (CIE L*) from which the highlight white prints (our choice).
pub const DEFAULT_HIGHLIGHT_LIGHTNESS: f64 = 90.0;

/// Film settings of a separation. Films are made only when `SeparateOptions::films` holds
/// these.
#[derive(Debug, Clone, PartialEq)]
pub struct FilmSettings {
    /// Which film files: TIFF and PNG per plate, one PDF.
    pub formats: FilmFormats,
    /// Clear film around the artwork, in millimetres.
    pub margin_mm: f64,
    /// Flip the films for emulsion-side-down exposure.
    pub mirror: bool,
    /// Job name on the films; default: the input's stem.
    pub job: Option<String>,
    /// Screening of tints; `None`: tints print solid at 50 % or more.
    pub halftone: Option<Halftone>,
    /// Ink amounts from the Murray–Davies relation instead of solid plates.
    pub tints: bool,
    /// Minimum-feature cleanup.
    pub min_feature: Option<MinFeature>,
    /// Underbase white under the colours (for dark substrates).
    pub underbase: Option<UnderbaseOptions>,
    /// Highlight white printed last where the artwork's CIE L* is at least this.
    pub highlight_white: Option<f64>,
}

impl Default for FilmSettings {
    fn default() -> Self {
        FilmSettings {
            formats: FilmFormats::default(),
            margin_mm: film::DEFAULT_MARGIN_MM,
            mirror: false,
            job: None,
            halftone: None,
            tints: false,
            min_feature: None,
            underbase: None,
            highlight_white: None,
        }
    }
}

fn bad(message: String) -> crate::Error {
    ParamsError::Other(message).into()
}

impl FilmSettings {
    /// Checks the settings (messages name them) and the print resolution.
    pub fn check(&self, dpi: f64) -> Result<()> {
        if !(dpi.is_finite() && dpi > 0.0 && dpi <= film::MAX_DPI) {
            return Err(bad(format!(
                "`dpi` must be a positive number of dots per inch, at most {} (got {dpi})",
                film::MAX_DPI
            )));
        }
        let f = self.formats;
        if !(f.tiff || f.png || f.pdf) {
            return Err(bad(
                "`films` must name at least one of tiff, pdf, png".into()
            ));
        }
        if !(self.margin_mm.is_finite() && self.margin_mm >= film::MIN_MARGIN_WITH_MARKS_MM) {
            return Err(bad(format!(
                "`margin_mm` must be at least {} mm, to hold the marks, label and step strip \
                 (got {})",
                film::MIN_MARGIN_WITH_MARKS_MM,
                self.margin_mm
            )));
        }
        if let Some(h) = &self.halftone {
            // Stochastic dots have no grid, so no lines per inch to check.
            let grid = h.kind != film::ScreenKind::Stochastic;
            if !(h.lpi.is_finite() && h.lpi > 0.0 && (!grid || h.lpi <= dpi / 2.0)) {
                return Err(bad(format!(
                    "`lpi` must be a positive number of lines per inch, at most half the \
                     print resolution ({} at {dpi} dpi; got {})",
                    dpi / 2.0,
                    h.lpi
                )));
            }
            if let Some(a) = h
                .angles
                .iter()
                .find(|a| !(a.is_finite() && (0.0..180.0).contains(*a)))
            {
                return Err(bad(format!(
                    "`screen_angles` must be at least 0 and below 180 degrees (a screen \
                     repeats every 180°; got {a})"
                )));
            }
        }
        if let Some(m) = &self.min_feature {
            let px = m.size.to_px(dpi, "`min_feature`")?;
            if px > 1.0e6 {
                return Err(bad(format!(
                    "`min_feature` of {px:.0} film pixels is larger than any plate"
                )));
            }
        }
        if let Some(u) = &self.underbase {
            u.choke.to_px(dpi, "`choke_mm`")?;
        }
        if let Some(l) = self.highlight_white {
            if !(l.is_finite() && (0.0..=100.0).contains(&l)) {
                return Err(bad(format!(
                    "`highlight_white` must be a CIE L* between 0 and 100 (got {l})"
                )));
            }
        }
        Ok(())
    }

    /// The film module's options at a print resolution.
    pub fn film_options(&self, dpi: f64, stem: &str) -> FilmOptions {
        let mut o = FilmOptions::new(dpi);
        o.margin_mm = self.margin_mm;
        o.mirror = self.mirror;
        o.job = self.job.clone().unwrap_or_else(|| stem.to_string());
        o.halftone = self.halftone.clone();
        o.min_feature = self.min_feature;
        o.underbase = self.underbase;
        o
    }
}

/// The colour plates of a separation, in plate order: solid where the plate's mask is set,
/// or with tints the amount the separation chose on the plate's own pixels (a trapped
/// spread stays solid).
pub fn plate_images(sep: &Separation) -> Result<Vec<PlateImage>> {
    sep.inks
        .iter()
        .enumerate()
        .map(|(i, ink)| {
            let mask = &sep.masks[i];
            let amount: Vec<u8> = mask
                .iter()
                .enumerate()
                .map(|(p, &m)| match (&sep.tints, m) {
                    (_, false) => 0,
                    (Some(t), true) if sep.labels[p] as usize == i => t[p],
                    _ => 255,
                })
                .collect();
            PlateImage::new(&ink.name, i + 1, i + 1, sep.width, sep.height, amount)
        })
        .collect()
}

/// Display colour of an ink.
pub fn ink_colour(ink: &Ink) -> [u8; 3] {
    colour::parse_hex(&ink.hex).unwrap_or([0, 0, 0])
}

/// Display colour of a film page's plate: white for the underbase and highlight white.
fn page_colour(role: PlateRole, ink: Option<&Ink>) -> [u8; 3] {
    match (role, ink) {
        (PlateRole::Colour, Some(i)) => ink_colour(i),
        _ => [255, 255, 255],
    }
}

/// Whether film pixel `(x, y)` of the artwork prints on `page` (mirrored pages read back).
fn film_ink(films: &FilmSet, page: usize, x: u32, y: u32) -> bool {
    let pg = &films.pages[page];
    let px = pg.art.x + x;
    let px = if pg.mirrored {
        pg.bitmap.width() - 1 - px
    } else {
        px
    };
    pg.bitmap.get(px as i64, (pg.art.y + y) as i64)
}

/// Colours of the film pages, in page order.
pub fn page_colours(films: &FilmSet, inks: &[Ink]) -> Vec<[u8; 3]> {
    films
        .plates
        .iter()
        .map(|p| {
            let ink = inks.iter().find(|i| i.name.trim() == p.ink);
            page_colour(p.role, ink)
        })
        .collect()
}

/// The stacked proof: every film in print order (the underbase first) laid as its ink on
/// the substrate colour (white when none is given), from the screened films, so halftone
/// dots show as they print. RGBA, opaque.
pub fn stacked_proof(films: &FilmSet, colours: &[[u8; 3]], substrate: Option<[u8; 3]>) -> Vec<u8> {
    let paper = substrate.unwrap_or([255, 255, 255]);
    let art = films.layout.art;
    let mut order: Vec<usize> = (0..films.pages.len()).collect();
    order.sort_by_key(|&i| (films.plates[i].print_order, i));
    let mut out = vec![0u8; art.w as usize * art.h as usize * 4];
    use rayon::prelude::*;
    out.par_chunks_mut(art.w as usize * 4)
        .enumerate()
        .for_each(|(y, row)| {
            for x in 0..art.w {
                let mut c = paper;
                for &i in &order {
                    if film_ink(films, i, x, y as u32) {
                        c = colours[i];
                    }
                }
                let o = x as usize * 4;
                row[o..o + 3].copy_from_slice(&c);
                row[o + 3] = 255;
            }
        });
    out
}

/// Background of a plate's preview: the substrate, unless the ink would hardly show on it
/// (CIE L* within 20), then black for light inks and white for dark ones.
fn preview_background(ink: [u8; 3], substrate: Option<[u8; 3]>) -> [u8; 3] {
    let paper = substrate.unwrap_or([255, 255, 255]);
    let (li, lp) = (colour::srgb8_to_lab(ink)[0], colour::srgb8_to_lab(paper)[0]);
    if (li - lp).abs() >= 20.0 {
        paper
    } else if li > 50.0 {
        [0, 0, 0]
    } else {
        [255, 255, 255]
    }
}

/// One film as its ink colour on a background (see [`preview_background`]). RGBA.
pub fn plate_preview(
    films: &FilmSet,
    page: usize,
    colour: [u8; 3],
    substrate: Option<[u8; 3]>,
) -> Vec<u8> {
    let art = films.layout.art;
    let bg = preview_background(colour, substrate);
    let mut out = vec![0u8; art.w as usize * art.h as usize * 4];
    for y in 0..art.h {
        for x in 0..art.w {
            let c = if film_ink(films, page, x, y) {
                colour
            } else {
                bg
            };
            let o = (y as usize * art.w as usize + x as usize) * 4;
            out[o..o + 3].copy_from_slice(&c);
            out[o + 3] = 255;
        }
    }
    out
}

/// File name of a plate's preview.
pub fn preview_name(stem: &str, number: usize, ink: &str) -> String {
    format!("{stem}.preview-{number:02}-{}.png", super::file_safe(ink))
}

/// Whether `name` is a plate, film, preview or cleanup file of `stem`'s separations.
fn of_a_separation(stem: &str, name: &str) -> bool {
    let Some(rest) = name.strip_prefix(stem).and_then(|r| r.strip_prefix('.')) else {
        return false;
    };
    if matches!(
        rest,
        "films.pdf" | "cleanup.csv" | "cleanup.png" | "stack.png"
    ) {
        return true;
    }
    for (kind, exts) in [
        ("plate-", &["png"][..]),
        ("preview-", &["png"][..]),
        ("film-", &["tif", "png"][..]),
    ] {
        if let Some(r) = rest.strip_prefix(kind) {
            let Some((body, ext)) = r.rsplit_once('.') else {
                return false;
            };
            let b = body.as_bytes();
            return exts.contains(&ext)
                && b.len() > 3
                && b[0].is_ascii_digit()
                && b[1].is_ascii_digit()
                && b[2] == b'-'
                && !body.contains('.');
        }
    }
    false
}

/// Plate, film, preview and cleanup files of `stem` in `dir` that this run will not
/// write (`names`): left by an earlier run with other plates. Sorted.
pub fn stale_files(dir: &Path, stem: &str, names: &[String]) -> Vec<PathBuf> {
    let mut out: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .filter(|e| e.file_type().is_ok_and(|t| t.is_file()))
                .filter_map(|e| {
                    let n = e.file_name().to_str()?.to_string();
                    (of_a_separation(stem, &n) && !names.contains(&n)).then(|| e.path())
                })
                .collect()
        })
        .unwrap_or_default();
    out.sort();
    out
}

/// The refusal when an earlier run's files would mix with this run's.
pub fn stale_error(dir: &Path, stale: &[PathBuf]) -> crate::Error {
    let names: Vec<String> = stale
        .iter()
        .filter_map(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    let shown = if names.len() > 6 {
        format!("{}, … ({} in all)", names[..6].join(", "), names.len())
    } else {
        names.join(", ")
    };
    crate::Error::output(
        dir,
        format!(
            "the folder holds plates or films of an earlier run with other plates ({shown}); \
             give `replace` to remove them with this run, or write to another folder"
        ),
    )
}

/// The 8-bit RGB and RGBA of decoded artwork.
pub fn rgba8(img: &crate::raster::Decoded) -> Vec<u8> {
    match &img.pixels {
        crate::raster::Pixels::Rgba8(p) => p.clone(),
        crate::raster::Pixels::Rgba16(p) => {
            p.iter().map(|&v| ((v as u32 + 128) / 257) as u8).collect()
        }
    }
}

/// Labels of fully or partly transparent pixels: those whose alpha is below
/// `threshold` (0..=1) become transparent (no ink). Returns (partly transparent pixels
/// that were inked or substrate, of them made transparent).
pub fn apply_alpha_threshold(labels: &mut [u16], alpha: &[u8], threshold: f64) -> (u64, u64) {
    let mut partial = 0;
    let mut dropped = 0;
    for (l, &a) in labels.iter_mut().zip(alpha) {
        if *l == FIXED || a == 255 {
            continue;
        }
        partial += 1;
        if (a as f64) < threshold * 255.0 {
            *l = FIXED;
            dropped += 1;
        }
    }
    (partial, dropped)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn earlier_runs_files_are_recognised() {
        assert!(of_a_separation("poster", "poster.plate-01-chalk-white.png"));
        assert!(of_a_separation("poster", "poster.film-02-boat-red.tif"));
        assert!(of_a_separation("poster", "poster.films.pdf"));
        assert!(of_a_separation("poster", "poster.preview-03-sand.png"));
        assert!(!of_a_separation("poster", "poster.separation.json"));
        assert!(!of_a_separation("poster", "poster.proof.png"));
        assert!(!of_a_separation(
            "poster",
            "poster.plate-01-x.plate-01-y.png"
        ));
        assert!(!of_a_separation("post", "poster.plate-01-x.png"));
        assert!(!of_a_separation(
            "poster.plate-01-x",
            "poster.plate-01-x.png"
        ));
    }

    #[test]
    fn the_alpha_threshold_keeps_half_opaque_pixels() {
        let mut labels = vec![0u16, 0, 0, 0, FIXED];
        let (partial, dropped) = apply_alpha_threshold(&mut labels, &[255, 128, 127, 10, 0], 0.5);
        assert_eq!(labels, [0, 0, FIXED, FIXED, FIXED]);
        assert_eq!((partial, dropped), (3, 2));
    }
}
