//! Films a print shop can expose screens from: one 1-bit page per plate at the print
//! resolution, with halftone or stochastic screening for tints, an optional choked
//! underbase white for dark garments, minimum-feature cleanup in the shop's units,
//! registration and crop marks, a label line and a step strip on a margin, and writers for
//! 1-bit TIFF, 1-bit PNG and a multi-page PDF at true size.
//!
//! The module knows nothing of how plates were made: it takes [`PlateImage`]s (per pixel,
//! how much of one ink, 0 = none, 255 = solid) and [`FilmOptions`], and returns a
//! [`FilmSet`]. The steps, each also callable on its own:
//!
//! 1. transparency ([`apply_alpha`]): below the alpha threshold (default 50 %) a pixel
//!    gets no ink; at or above it keeps its amount (or, with [`AlphaRule::Tint`], the
//!    amount is scaled by alpha so soft edges become halftone dots);
//! 2. minimum feature ([`clean_plates`]): specks smaller than the limit in both directions
//!    are removed (or grown to the limit), thin-but-long shapes are kept;
//! 3. underbase ([`add_underbase`]): a white plate under every inked pixel of the colour
//!    plates, choked (eroded) by a distance at the print resolution;
//! 4. screening ([`Screener`]): tints become AM halftone dots (round or elliptical, lines
//!    per inch, one angle per plate) or a stochastic (FM) pattern; solid stays solid and
//!    0 stays clear;
//! 5. pages ([`FilmPage`]): the plate on a margin with marks, label and step strip;
//!    `mirror` flips the page for emulsion-side-down exposure;
//! 6. files ([`write_films`]): TIFF and PNG per plate and one PDF, written atomically.
//!
//! # Example
//!
//! ```
//! use chromasift::film::{make_films, FilmOptions, Halftone, PlateImage};
//!
//! // A 60 × 40 px plate: a 50 % tint on the left, solid on the right.
//! let (w, h) = (60u32, 40u32);
//! let amount: Vec<u8> = (0..w * h).map(|i| if i % w < 30 { 128 } else { 255 }).collect();
//! let plate = PlateImage::new("Warm red", 1, 1, w, h, amount).unwrap();
//! let mut opts = FilmOptions::new(300.0);
//! opts.job = "Poster".into();
//! opts.halftone = Some(Halftone::default());
//! let films = make_films(&[plate], None, &opts).unwrap();
//! assert_eq!(films.pages.len(), 1);
//! let page = &films.pages[0];
//! // The page is the artwork plus the margins, at 300 dpi.
//! assert!(page.bitmap.width() > w && page.bitmap.height() > h);
//! ```

mod alpha;
mod bitmap;
mod cleanup;
mod distance;
mod font;
mod page;
mod screen;
mod underbase;
mod write;

pub use alpha::{apply_alpha, AlphaNote, AlphaRule};
pub use bitmap::Bitmap;
pub use cleanup::{
    clean_plate, clean_plates, cleanup_csv, cleanup_picture, CleanedFeature, CleanupAction,
    CleanupReport, MinFeature, SmallFeature,
};
pub use distance::squared_distance_to_background;
pub use page::{label_text, wrap_label, FilmLayout, FilmPage, Rect, LABEL_SEPARATOR, STRIP_STEPS};
pub use screen::{auto_angles, DotShape, Halftone, ScreenKind, Screener, DEFAULT_LPI};
pub use underbase::{add_underbase, highlight_white, underbase, UnderbaseFill, UnderbaseOptions};
pub use write::{
    file_safe, film_name, pdf_bytes, png_bytes, tiff_bytes, write_films, write_films_into,
    FilmFormats,
};

use crate::error::{ParamsError, Result};

/// Millimetres per inch (exact, by definition of the inch).
pub const MM_PER_INCH: f64 = 25.4;

/// PDF user-space units (points) per inch: ISO 32000-1 §8.3.2.3 (1/72 inch by default).
pub const POINTS_PER_INCH: f64 = 72.0;

/// Highest print resolution accepted, in dots per inch (our bound: far above any film
/// output device, and it keeps page sizes in pixels within `u32`).
pub const MAX_DPI: f64 = 10_000.0;

/// Default margin around the artwork, in millimetres (our choice: room for the marks,
/// the label line and the step strip).
pub const DEFAULT_MARGIN_MM: f64 = 20.0;

/// Smallest margin that holds the marks, label and strip, in millimetres.
pub const MIN_MARGIN_WITH_MARKS_MM: f64 = 12.0;

/// Largest film page, in pixels (the crate's default decode limit, 200 million pixels).
pub const MAX_PAGE_PIXELS: u64 = 200_000_000;

pub(crate) fn bad(message: impl Into<String>) -> crate::Error {
    ParamsError::Other(message.into()).into()
}

/// A length in the shop's units, turned into pixels at the print resolution.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Length {
    /// Millimetres.
    Mm(f64),
    /// Pixels at the print resolution.
    Px(f64),
    /// A multiple of the thread spacing of a mesh: spacing = 25.4 mm / mesh count (threads
    /// per inch), as is common practice (the thread diameter is ignored).
    Threads {
        /// Mesh count in threads per inch.
        mesh_count: f64,
        /// How many thread spacings.
        multiple: f64,
    },
}

impl Length {
    /// The length in pixels at `dpi`. Errors name `what` when the length is negative or
    /// not finite, or the mesh count is not positive.
    pub fn to_px(self, dpi: f64, what: &str) -> Result<f64> {
        let px = match self {
            Length::Mm(mm) => {
                if !(mm.is_finite() && mm >= 0.0) {
                    return Err(bad(format!(
                        "{what} must be a finite number of millimetres >= 0 (got {mm})"
                    )));
                }
                mm / MM_PER_INCH * dpi
            }
            Length::Px(px) => {
                if !(px.is_finite() && px >= 0.0) {
                    return Err(bad(format!(
                        "{what} must be a finite number of pixels >= 0 (got {px})"
                    )));
                }
                px
            }
            Length::Threads {
                mesh_count,
                multiple,
            } => {
                if !(mesh_count.is_finite() && mesh_count > 0.0) {
                    return Err(bad(format!(
                        "{what}: the mesh count must be a positive number of threads per inch \
                         (got {mesh_count})"
                    )));
                }
                if !(multiple.is_finite() && multiple >= 0.0) {
                    return Err(bad(format!(
                        "{what}: the multiple of the thread spacing must be a finite number >= 0 \
                         (got {multiple})"
                    )));
                }
                multiple * (MM_PER_INCH / mesh_count) / MM_PER_INCH * dpi
            }
        };
        Ok(px)
    }
}

/// What a plate is for: the underbase is made from the colour plates only.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlateRole {
    /// An ink of the artwork.
    Colour,
    /// The white printed first under the colours on a dark substrate.
    Underbase,
    /// A white printed last on the lightest areas.
    HighlightWhite,
}

/// One plate: per pixel, how much of one ink prints (0 = none, 255 = solid; between =
/// a tint, screened when halftones are on).
#[derive(Debug, Clone, PartialEq)]
pub struct PlateImage {
    /// Ink name, as printed on the film's label.
    pub ink: String,
    /// Plate number, 1-based (the position in the set).
    pub number: usize,
    /// Print order, 1-based (1 prints first).
    pub print_order: usize,
    pub width: u32,
    pub height: u32,
    /// Row-major, `width × height` values.
    pub amount: Vec<u8>,
    pub role: PlateRole,
}

impl PlateImage {
    /// A colour plate. Errors when `amount` does not hold `width × height` values or the
    /// plate is empty.
    pub fn new(
        ink: &str,
        number: usize,
        print_order: usize,
        width: u32,
        height: u32,
        amount: Vec<u8>,
    ) -> Result<Self> {
        let plate = PlateImage {
            ink: ink.trim().to_string(),
            number,
            print_order,
            width,
            height,
            amount,
            role: PlateRole::Colour,
        };
        plate.check()?;
        Ok(plate)
    }

    /// A colour plate from a coverage mask (`true` = solid ink), as `separate` makes them.
    pub fn from_mask(
        ink: &str,
        number: usize,
        print_order: usize,
        width: u32,
        height: u32,
        mask: &[bool],
    ) -> Result<Self> {
        Self::new(
            ink,
            number,
            print_order,
            width,
            height,
            mask.iter().map(|&m| if m { 255 } else { 0 }).collect(),
        )
    }

    /// Checks the geometry.
    pub fn check(&self) -> Result<()> {
        if self.width == 0 || self.height == 0 {
            return Err(bad(format!(
                "plate '{}' is {} × {} pixels; a plate needs at least one pixel",
                self.ink, self.width, self.height
            )));
        }
        let n = self.width as u64 * self.height as u64;
        if self.amount.len() as u64 != n {
            return Err(bad(format!(
                "plate '{}' has {} values for {} × {} pixels",
                self.ink,
                self.amount.len(),
                self.width,
                self.height
            )));
        }
        if self.number == 0 || self.print_order == 0 {
            return Err(bad(format!(
                "plate '{}': plate number and print order count from 1",
                self.ink
            )));
        }
        Ok(())
    }

    /// True when some pixel holds a tint (neither 0 nor 255).
    pub fn has_tints(&self) -> bool {
        self.amount.iter().any(|&a| a != 0 && a != 255)
    }

    /// Share of the plate's pixels that get any ink.
    pub fn inked_share(&self) -> f64 {
        let inked = self.amount.iter().filter(|&&a| a > 0).count();
        inked as f64 / self.amount.len().max(1) as f64
    }
}

/// Settings of the films.
#[derive(Debug, Clone, PartialEq)]
pub struct FilmOptions {
    /// Print (film output) resolution in dots per inch. No default: the caller passes the
    /// resolution given by the user or recorded in the artwork.
    pub dpi: f64,
    /// Clear film around the artwork, on every side, in millimetres. Default:
    /// [`DEFAULT_MARGIN_MM`]. With marks, at least [`MIN_MARGIN_WITH_MARKS_MM`].
    pub margin_mm: f64,
    /// Registration marks, crop marks, label line and step strip. Default: on.
    pub marks: bool,
    /// Flip every page left to right, for exposure with the emulsion side down. Default: off.
    pub mirror: bool,
    /// Job name on the label line.
    pub job: String,
    /// Screening of tints; `None` prints a tint at or above 50 % solid and below it not at
    /// all (a plain threshold; the set's notes say how many pixels that touched).
    pub halftone: Option<Halftone>,
    /// How partial transparency is treated (when an alpha channel is given).
    pub alpha: AlphaRule,
    /// Minimum-feature cleanup; `None` changes nothing.
    pub min_feature: Option<MinFeature>,
    /// Underbase white under the colour plates; `None` adds none.
    pub underbase: Option<UnderbaseOptions>,
}

impl FilmOptions {
    /// Defaults at a print resolution: 20 mm margin, marks on, no mirror, no halftone,
    /// alpha threshold 50 %, no cleanup, no underbase.
    pub fn new(dpi: f64) -> Self {
        FilmOptions {
            dpi,
            margin_mm: DEFAULT_MARGIN_MM,
            marks: true,
            mirror: false,
            job: String::new(),
            halftone: None,
            alpha: AlphaRule::default(),
            min_feature: None,
            underbase: None,
        }
    }

    /// Checks every option (with a message naming it).
    pub fn check(&self) -> Result<()> {
        check_dpi(self.dpi)?;
        if !(self.margin_mm.is_finite() && self.margin_mm >= 0.0) {
            return Err(bad(format!(
                "margin must be a finite number of millimetres >= 0 (got {})",
                self.margin_mm
            )));
        }
        if self.marks && self.margin_mm < MIN_MARGIN_WITH_MARKS_MM {
            return Err(bad(format!(
                "a margin of {} mm is too small for the marks, label and step strip; give at \
                 least {MIN_MARGIN_WITH_MARKS_MM} mm or turn the marks off",
                self.margin_mm
            )));
        }
        if let Some(h) = &self.halftone {
            h.check(self.dpi)?;
        }
        self.alpha.check()?;
        if let Some(m) = &self.min_feature {
            m.limit_px(self.dpi)?;
            m.check()?;
        }
        if let Some(u) = &self.underbase {
            u.choke.to_px(self.dpi, "underbase choke")?;
        }
        Ok(())
    }
}

/// A note when tinted plates' screens share an angle (the same modulo 90°, a dot screen's
/// symmetry): moiré between them is possible.
fn shared_angles_note(angles: &[f64]) -> Option<String> {
    let mut pairs = 0;
    for (i, a) in angles.iter().enumerate() {
        for b in &angles[i + 1..] {
            let d = (a - b).rem_euclid(90.0);
            pairs += usize::from(d.min(90.0 - d) < 0.5);
        }
    }
    (pairs > 0).then(|| {
        format!(
            "{} tinted plates, screened at {}°: {pairs} pair{} of them share an angle, so \
             moiré between them is possible (at most 4 angles are 15° or more apart; give \
             `screen_angles` one per tinted plate)",
            angles.len(),
            angles
                .iter()
                .map(|a| format!("{a}"))
                .collect::<Vec<_>>()
                .join(", "),
            if pairs == 1 { "" } else { "s" },
        )
    })
}

/// Checks a print resolution.
pub fn check_dpi(dpi: f64) -> Result<()> {
    if !(dpi.is_finite() && dpi > 0.0) {
        return Err(bad(format!(
            "dpi (print resolution) must be a positive number (got {dpi})"
        )));
    }
    if dpi > MAX_DPI {
        return Err(bad(format!(
            "dpi (print resolution) must be at most {MAX_DPI} (got {dpi})"
        )));
    }
    Ok(())
}

/// How one plate was put on film.
#[derive(Debug, Clone, PartialEq)]
pub struct PlateFilm {
    pub ink: String,
    pub number: usize,
    pub print_order: usize,
    pub role: PlateRole,
    /// Screen used for its tints, as written on the label (e.g. "55 lpi 45° round"), or
    /// "solid" when the plate has no tints or halftones are off.
    pub screen: String,
    /// Screen angle in degrees (AM halftones only).
    pub angle: Option<f64>,
    /// Share of the artwork area that is ink on the film, as printed (after cleanup,
    /// choke and screening).
    pub coverage: f64,
}

/// The films of one job.
#[derive(Debug, Clone)]
pub struct FilmSet {
    /// One page per plate, in plate-number order (the underbase first when one was added).
    pub pages: Vec<FilmPage>,
    /// Per page, what was done.
    pub plates: Vec<PlateFilm>,
    /// The page layout, the same for every page.
    pub layout: FilmLayout,
    /// What minimum-feature cleanup removed or grew (when it ran).
    pub cleanup: Option<CleanupReport>,
    /// The plates as screened, before page layout (after alpha, cleanup and underbase):
    /// for previews and coverage.
    pub plates_in: Vec<PlateImage>,
    /// Plain-worded notes: how transparency was treated, unscreened tints, angles shared.
    pub notes: Vec<String>,
}

/// Checks that all plates are well formed and of one size.
pub fn check_plates(plates: &[PlateImage]) -> Result<(u32, u32)> {
    let first = plates
        .first()
        .ok_or_else(|| bad("there are no plates to put on film"))?;
    for p in plates {
        p.check()?;
        if (p.width, p.height) != (first.width, first.height) {
            return Err(bad(format!(
                "plate '{}' is {} × {} pixels but plate '{}' is {} × {}; all plates of a job \
                 must be the same size",
                p.ink, p.width, p.height, first.ink, first.width, first.height
            )));
        }
    }
    Ok((first.width, first.height))
}

/// Makes the films of a job: transparency, cleanup, underbase, screening and page layout,
/// as set in `opts`. `alpha`, when given, holds one alpha value per artwork pixel.
pub fn make_films(
    plates: &[PlateImage],
    alpha: Option<&[u8]>,
    opts: &FilmOptions,
) -> Result<FilmSet> {
    opts.check()?;
    let (w, h) = check_plates(plates)?;
    let mut plates: Vec<PlateImage> = plates.to_vec();
    let mut notes = Vec::new();
    if let Some(alpha) = alpha {
        let mut total = AlphaNote::default();
        for p in plates.iter_mut() {
            let n = apply_alpha(&mut p.amount, alpha, opts.alpha)?;
            total.add(&n);
        }
        notes.push(total.describe(opts.alpha, plates.len()));
    }
    let cleanup = match &opts.min_feature {
        Some(rule) => Some(clean_plates(&mut plates, rule, opts.dpi)?),
        None => None,
    };
    if let Some(u) = &opts.underbase {
        add_underbase(&mut plates, u, opts.dpi)?;
    }
    // Screens: every plate with tints gets one when halftones are on.
    let screened: Vec<bool> = plates.iter().map(|p| p.has_tints()).collect();
    let screeners: Vec<Option<Screener>> = match &opts.halftone {
        Some(ht) => {
            let n = screened.iter().filter(|&&s| s).count();
            let angles = ht.angles_for(n);
            if ht.kind != ScreenKind::Stochastic {
                notes.extend(shared_angles_note(&angles));
            }
            let mut k = 0;
            screened
                .iter()
                .map(|&s| {
                    if s {
                        let sc = Screener::new(ht, angles[k], opts.dpi);
                        k += 1;
                        sc.map(Some)
                    } else {
                        Ok(None)
                    }
                })
                .collect::<Result<_>>()?
        }
        None => {
            let tinted: usize = plates
                .iter()
                .map(|p| p.amount.iter().filter(|&&a| a != 0 && a != 255).count())
                .sum();
            if tinted > 0 {
                notes.push(format!(
                    "halftones are off: {tinted} tinted pixels print solid at 50 % or more and \
                     not at all below"
                ));
            }
            vec![None; plates.len()]
        }
    };
    let strip_screen = match &opts.halftone {
        Some(ht) => Screener::new(ht, ht.angles.first().copied().unwrap_or(45.0), opts.dpi)?,
        // Solid films: the strip alone is screened, as finely as the resolution holds.
        None => {
            let ht = Halftone::default();
            let lpi = ht.lpi.min(opts.dpi / 2.0);
            Screener::new(&Halftone { lpi, ..ht }, 45.0, opts.dpi)?
        }
    };
    let count = plates.len();
    let labels: Vec<String> = plates
        .iter()
        .zip(&screeners)
        .map(|(p, sc)| page::label_text(p, count, sc.as_ref(), opts))
        .collect();
    let layout = FilmLayout::new(w, h, &labels, opts)?;
    // Pages in parallel: each is independent of the others.
    use rayon::prelude::*;
    let made: Vec<(FilmPage, PlateFilm)> = plates
        .par_iter()
        .zip(screeners.par_iter())
        .map(|(p, sc)| {
            let page = FilmPage::compose(p, count, sc.as_ref(), &strip_screen, &layout, opts)?;
            let art = layout.art;
            let inked = page.bitmap.count_ink(art.x, art.y, art.w, art.h);
            let info = PlateFilm {
                ink: p.ink.clone(),
                number: p.number,
                print_order: p.print_order,
                role: p.role,
                screen: sc
                    .as_ref()
                    .map(|s| s.describe())
                    .unwrap_or_else(|| "solid".into()),
                angle: sc.as_ref().and_then(|s| s.angle()),
                coverage: inked as f64 / (w as f64 * h as f64),
            };
            Ok((page, info))
        })
        .collect::<Result<_>>()?;
    let (pages, infos): (Vec<FilmPage>, Vec<PlateFilm>) = made.into_iter().unzip();
    Ok(FilmSet {
        pages,
        plates: infos,
        layout,
        cleanup,
        plates_in: plates,
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn screens_sharing_an_angle_are_noted() {
        assert_eq!(shared_angles_note(&[45.0, 75.0, 15.0, 0.0]), None);
        let n = shared_angles_note(&[22.5, 22.5]).unwrap();
        assert!(n.contains("1 pair") && n.contains("22.5, 22.5"), "{n}");
        // 0° and 90° are the same screen for a dot with 90° symmetry.
        assert!(shared_angles_note(&[0.0, 90.0]).is_some());
        // Five tinted plates on the common sequence: the fifth repeats the first.
        assert!(shared_angles_note(&auto_angles(5)).is_some());
    }
}
