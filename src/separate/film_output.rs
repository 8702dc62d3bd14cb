//! The films of a separation: made from its plates, reported in its document, and written
//! into its output set with the stacked proof and the per-plate previews.

use super::films::{self, FilmSettings};
use super::{FilmReport, FilmsReport, SeparateOptions, Separation};
use crate::error::{ParamsError, Result};
use crate::film::{self, FilmSet, PlateRole};
use crate::output::OutputSet;
use crate::raster::{self, Decoded};

/// Films made for a separation, with the names of every file they add.
pub(super) struct Made {
    films: FilmSet,
    settings: FilmSettings,
    job: String,
    colours: Vec<[u8; 3]>,
    /// Every file name the films add (films, PDF, cleanup, previews, stacked proof).
    pub names: Vec<String>,
}

fn stack_name(stem: &str) -> String {
    format!("{stem}.stack.png")
}

/// Makes the films of `sep` and records them in its document (film coverage per ink, the
/// films part, notes).
pub(super) fn make(
    sep: &mut Separation,
    img: &Decoded,
    settings: &FilmSettings,
    stem: &str,
) -> Result<Made> {
    let dpi = sep.document.dpi.ok_or_else(|| {
        crate::Error::from(ParamsError::Other(
            "films need a print resolution and the artwork records none; give `dpi`".into(),
        ))
    })?;
    settings.check(dpi)?;
    let rgba = films::rgba8(img);
    let mut plates = films::plate_images(sep)?;
    if let Some(l) = settings.highlight_white {
        let n = plates.len() + 1;
        plates.push(film::highlight_white(
            &rgba, sep.width, sep.height, l, n, n,
        )?);
    }
    let fopts = settings.film_options(dpi, stem);
    let set = film::make_films(&plates, None, &fopts)?;
    let colours = films::page_colours(&set, &sep.inks);

    // Coverage as printed: the colour plates after cleanup, and on the film.
    let inked: u64 = sep.document.inks.iter().map(|i| i.pixels).sum();
    let area = sep.width as f64 * sep.height as f64;
    let colour_pages: Vec<usize> = (0..set.plates.len())
        .filter(|&i| set.plates[i].role == PlateRole::Colour)
        .collect();
    for (ink, &page) in sep.document.inks.iter_mut().zip(&colour_pages) {
        let printed = set.plates_in[page]
            .amount
            .iter()
            .filter(|&&a| a > 0)
            .count() as u64;
        ink.pixels_printed = printed;
        if inked > 0 {
            ink.coverage_printed = printed as f64 / inked as f64;
            ink.film_coverage = Some(set.plates[page].coverage * area / inked as f64);
        }
    }

    let f = settings.formats;
    let mut names = Vec::new();
    let mut reports = Vec::new();
    for (page, info) in set.pages.iter().zip(&set.plates) {
        let mut files = Vec::new();
        if f.tiff {
            files.push(film::film_name(stem, page, "tif"));
        }
        if f.png {
            files.push(film::film_name(stem, page, "png"));
        }
        names.extend(files.iter().cloned());
        names.push(films::preview_name(stem, page.number, &page.ink));
        reports.push(FilmReport {
            number: info.number,
            print_order: info.print_order,
            ink: info.ink.clone(),
            role: match info.role {
                PlateRole::Colour => "colour",
                PlateRole::Underbase => "underbase",
                PlateRole::HighlightWhite => "highlight white",
            }
            .into(),
            screen: info.screen.clone(),
            angle: info.angle,
            coverage_of_artwork: info.coverage,
            files,
        });
    }
    let pdf = f.pdf.then(|| format!("{stem}.films.pdf"));
    names.extend(pdf.iter().cloned());
    if set.cleanup.is_some() {
        names.push(format!("{stem}.cleanup.csv"));
        names.push(format!("{stem}.cleanup.png"));
    }
    names.push(stack_name(stem));
    let cleanup = set.cleanup.as_ref();
    if let Some(c) = cleanup {
        sep.document.notes.push(format!(
            "minimum feature {} film pixels ({:.2} mm): {} small shapes removed, {} grown \
             (see {stem}.cleanup.png and {stem}.cleanup.csv)",
            c.limit_px,
            c.limit_mm,
            c.removed(),
            c.grown()
        ));
    }
    for n in &set.notes {
        sep.document.notes.push(format!("films: {n}"));
    }
    let page_mm = set.pages.first().map_or((0.0, 0.0), |p| p.size_mm());
    sep.document.films = Some(FilmsReport {
        dpi,
        job: fopts.job.clone(),
        mirror: settings.mirror,
        margin_mm: settings.margin_mm,
        page_mm: [page_mm.0, page_mm.1],
        tints: settings.tints,
        min_feature_px: cleanup.map(|c| c.limit_px),
        min_feature_mm: cleanup.map(|c| c.limit_mm),
        cleanup_removed: cleanup.map_or(0, |c| c.removed()),
        cleanup_grown: cleanup.map_or(0, |c| c.grown()),
        films: reports,
        pdf,
        notes: set.notes.clone(),
    });
    Ok(Made {
        films: set,
        settings: settings.clone(),
        job: fopts.job,
        colours,
        names,
    })
}

/// Writes the films, the cleanup list and picture, the per-plate previews and the stacked
/// proof into `out` (renamed into place with the rest of the separation).
pub(super) fn write(
    out: &mut OutputSet,
    made: &Made,
    sep: &Separation,
    opts: &SeparateOptions,
    stem: &str,
) -> Result<()> {
    let set = &made.films;
    film::write_films_into(out, stem, set, made.settings.formats, &made.job)?;
    let art = set.layout.art;
    for (i, page) in set.pages.iter().enumerate() {
        let preview = films::plate_preview(set, i, made.colours[i], opts.substrate);
        out.write(&films::preview_name(stem, page.number, &page.ink), |w| {
            raster::write_rgba_png(w, art.w, art.h, &preview)
        })?;
    }
    let stack = films::stacked_proof(set, &made.colours, opts.substrate);
    debug_assert_eq!((art.w, art.h), (sep.width, sep.height));
    out.write(&stack_name(stem), |w| {
        raster::write_rgba_png(w, art.w, art.h, &stack)
    })?;
    Ok(())
}
