//! Film files:
//! - **TIFF**: a baseline TIFF 6.0 bilevel image per plate (BitsPerSample 1,
//!   PhotometricInterpretation 0 = WhiteIsZero so a set bit is ink, PackBits compression
//!   with each row packed on its own as TIFF 6.0 §9 asks, XResolution / YResolution in
//!   pixels per inch with ResolutionUnit 2 = inch), plus DocumentName (the job), PageName
//!   (the ink) and Software. The `tiff` crate's image encoder has no 1-bit colour type, so
//!   the directory is written with its low-level directory encoder.
//! - **PNG**: 1-bit greyscale (0 = black = ink) with a pHYs chunk in pixels per metre.
//! - **PDF**: one page per film at true size (MediaBox = pixels / dpi × 72 points,
//!   TrimBox = the artwork's box, ISO 32000-1 §14.11.2), the film as a 1-bit DeviceGray
//!   image XObject (Decode [1 0], so a set bit paints black) compressed with Flate.
//!
//! [`write_films`] writes them all into one [`OutputSet`], renamed into place together.

use std::io::{Cursor, Seek, Write};
use std::path::{Path, PathBuf};

use pdf_writer::{Content, Filter, Finish, Name, Pdf, Rect as PdfRect, Ref, TextStr};
use tiff::encoder::compression::{CompressionAlgorithm, Packbits};
use tiff::encoder::{Rational, TiffEncoder};
use tiff::tags::Tag;

use crate::error::{Error, Result};
use crate::output::OutputSet;

use super::{FilmPage, FilmSet, MM_PER_INCH, POINTS_PER_INCH};

/// Which files to write.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FilmFormats {
    pub tiff: bool,
    pub png: bool,
    pub pdf: bool,
}

impl Default for FilmFormats {
    /// All three.
    fn default() -> Self {
        FilmFormats {
            tiff: true,
            png: true,
            pdf: true,
        }
    }
}

pub use crate::output::file_safe;

/// File name of one film: `STEM.film-NN-INK.EXT`.
pub fn film_name(stem: &str, page: &FilmPage, ext: &str) -> String {
    format!(
        "{stem}.film-{:02}-{}.{ext}",
        page.number,
        crate::output::file_safe(&page.ink)
    )
}

fn tiff_error(e: tiff::TiffError) -> std::io::Error {
    match e {
        tiff::TiffError::IoError(io) => io,
        other => std::io::Error::other(other.to_string()),
    }
}

/// A resolution as a TIFF RATIONAL (thousandths, reduced).
fn rational(v: f64) -> Rational {
    let mut n = (v * 1000.0).round().clamp(1.0, u32::MAX as f64) as u64;
    let mut d = 1000u64;
    let g = gcd(n, d);
    n /= g;
    d /= g;
    Rational {
        n: n as u32,
        d: d as u32,
    }
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

/// Writes one film as a bilevel TIFF.
pub fn write_tiff<W: Write + Seek>(w: W, page: &FilmPage, job: &str) -> std::io::Result<()> {
    let b = &page.bitmap;
    let mut enc = TiffEncoder::new(w).map_err(tiff_error)?;
    let mut dir = enc.image_directory().map_err(tiff_error)?;
    // Strips of about 64 KiB of packed rows.
    let rows_per_strip = ((65536 / b.row_bytes().max(1)) as u32).clamp(1, b.height());
    let mut offsets: Vec<u32> = Vec::new();
    let mut counts: Vec<u32> = Vec::new();
    let mut y = 0u32;
    let too_big = |_| std::io::Error::other("film page too large for a TIFF file");
    while y < b.height() {
        let end = (y + rows_per_strip).min(b.height());
        let mut packed = Vec::new();
        for row in y..end {
            Packbits.write_to(&mut packed, b.row(row))?;
        }
        let off = dir.write_data(&packed[..]).map_err(tiff_error)?;
        offsets.push(u32::try_from(off).map_err(too_big)?);
        counts.push(u32::try_from(packed.len()).map_err(too_big)?);
        y = end;
    }
    let t = |r: tiff::TiffResult<()>| r.map_err(tiff_error);
    t(dir.write_tag(Tag::NewSubfileType, 0u32))?;
    t(dir.write_tag(Tag::ImageWidth, b.width()))?;
    t(dir.write_tag(Tag::ImageLength, b.height()))?;
    t(dir.write_tag(Tag::BitsPerSample, 1u16))?;
    t(dir.write_tag(Tag::Compression, 32773u16))?;
    t(dir.write_tag(Tag::PhotometricInterpretation, 0u16))?;
    if !job.trim().is_empty() {
        t(dir.write_tag(Tag::Unknown(269), ascii(job).as_str()))?;
    }
    t(dir.write_tag(Tag::StripOffsets, &offsets[..]))?;
    t(dir.write_tag(Tag::SamplesPerPixel, 1u16))?;
    t(dir.write_tag(Tag::RowsPerStrip, rows_per_strip))?;
    t(dir.write_tag(Tag::StripByteCounts, &counts[..]))?;
    t(dir.write_tag(Tag::XResolution, rational(page.dpi)))?;
    t(dir.write_tag(Tag::YResolution, rational(page.dpi)))?;
    t(dir.write_tag(Tag::Unknown(285), ascii(&page.ink).as_str()))?;
    t(dir.write_tag(Tag::ResolutionUnit, 2u16))?;
    t(dir.write_tag(
        Tag::Software,
        format!("chromasift {}", crate::TOOL_VERSION).as_str(),
    ))?;
    dir.finish().map_err(tiff_error)?;
    Ok(())
}

/// TIFF ASCII fields hold 7-bit text: typographic punctuation becomes its plain form
/// (see `font::plain`), other characters '?'.
fn ascii(s: &str) -> String {
    s.chars()
        .map(super::font::plain)
        .map(|c| {
            if c.is_ascii() && !c.is_ascii_control() {
                c
            } else {
                '?'
            }
        })
        .collect()
}

/// The TIFF file in memory.
pub fn tiff_bytes(page: &FilmPage, job: &str) -> std::io::Result<Vec<u8>> {
    let mut c = Cursor::new(Vec::new());
    write_tiff(&mut c, page, job)?;
    Ok(c.into_inner())
}

/// Writes one film as a 1-bit PNG with its resolution.
pub fn write_png<W: Write>(w: W, page: &FilmPage) -> std::io::Result<()> {
    let b = &page.bitmap;
    let mut enc = png::Encoder::new(w, b.width(), b.height());
    enc.set_color(png::ColorType::Grayscale);
    enc.set_depth(png::BitDepth::One);
    let ppm = (page.dpi / (MM_PER_INCH / 1000.0)).round() as u32;
    enc.set_pixel_dims(Some(png::PixelDimensions {
        xppu: ppm,
        yppu: ppm,
        unit: png::Unit::Meter,
    }));
    enc.add_text_chunk("Title".into(), ascii(&page.label))
        .map_err(std::io::Error::other)?;
    let mut writer = enc.write_header().map_err(std::io::Error::other)?;
    // PNG greyscale: 0 is black, so ink bits are inverted.
    let data: Vec<u8> = b.bytes().iter().map(|&v| !v).collect();
    writer
        .write_image_data(&data)
        .map_err(std::io::Error::other)?;
    writer.finish().map_err(std::io::Error::other)
}

/// The PNG file in memory.
pub fn png_bytes(page: &FilmPage) -> std::io::Result<Vec<u8>> {
    let mut v = Vec::new();
    write_png(&mut v, page)?;
    Ok(v)
}

/// A PDF with one film per page, each at true size.
pub fn pdf_bytes(pages: &[FilmPage], job: &str) -> Vec<u8> {
    let mut pdf = Pdf::new();
    let catalog = Ref::new(1);
    let tree = Ref::new(2);
    let info = Ref::new(3);
    let mut next = 4;
    let mut alloc = || {
        let r = Ref::new(next);
        next += 1;
        r
    };
    let ids: Vec<(Ref, Ref, Ref)> = pages.iter().map(|_| (alloc(), alloc(), alloc())).collect();
    pdf.catalog(catalog).pages(tree);
    pdf.pages(tree)
        .kids(ids.iter().map(|&(p, _, _)| p))
        .count(pages.len() as i32);
    let title = if job.trim().is_empty() {
        "films".to_string()
    } else {
        format!("{} films", job.trim())
    };
    pdf.document_info(info)
        .title(TextStr(&title))
        .creator(TextStr(&format!("chromasift {}", crate::TOOL_VERSION)));
    let image_name = Name(b"Film");
    for (page, &(page_id, image_id, content_id)) in pages.iter().zip(&ids) {
        let b = &page.bitmap;
        let pt = |px: f64| (px / page.dpi * POINTS_PER_INCH) as f32;
        let (w_pt, h_pt) = (pt(b.width() as f64), pt(b.height() as f64));
        // PDF's y axis points up: the artwork's box measured from the bottom edge.
        let a = page.art;
        let trim = PdfRect::new(
            pt(a.x as f64),
            pt((b.height() - a.y - a.h) as f64),
            pt((a.x + a.w) as f64),
            pt((b.height() - a.y) as f64),
        );
        let mut pg = pdf.page(page_id);
        pg.parent(tree)
            .media_box(PdfRect::new(0.0, 0.0, w_pt, h_pt))
            .trim_box(trim)
            .contents(content_id);
        pg.resources().x_objects().pair(image_name, image_id);
        pg.finish();
        let data = miniz_oxide::deflate::compress_to_vec_zlib(b.bytes(), 6);
        let mut img = pdf.image_xobject(image_id, &data);
        img.filter(Filter::FlateDecode);
        img.width(b.width() as i32)
            .height(b.height() as i32)
            .bits_per_component(1)
            .decode([1.0, 0.0]);
        img.color_space().device_gray();
        img.finish();
        let mut content = Content::new();
        content.save_state();
        content.transform([w_pt, 0.0, 0.0, h_pt, 0.0, 0.0]);
        content.x_object(image_name);
        content.restore_state();
        pdf.stream(content_id, &content.finish());
    }
    pdf.finish()
}

/// Adds the film files (and, when cleanup ran, `STEM.cleanup.png` and `STEM.cleanup.csv`)
/// to an output set; nothing lands until the set is committed.
pub fn write_films_into(
    set: &mut OutputSet,
    stem: &str,
    films: &FilmSet,
    formats: FilmFormats,
    job: &str,
) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for page in &films.pages {
        if formats.tiff {
            let name = film_name(stem, page, "tif");
            let bytes = tiff_bytes(page, job).map_err(|e| Error::io(set.path_of(&name), e))?;
            out.push(set.write_bytes(&name, &bytes)?);
        }
        if formats.png {
            out.push(set.write(&film_name(stem, page, "png"), |w| write_png(w, page))?);
        }
    }
    if formats.pdf {
        out.push(set.write_bytes(&format!("{stem}.films.pdf"), &pdf_bytes(&films.pages, job))?);
    }
    if let Some(report) = &films.cleanup {
        let picture = super::cleanup_picture(report, &films.plates_in);
        out.push(set.write(&format!("{stem}.cleanup.png"), |w| {
            crate::raster::write_rgba_png(w, report.width, report.height, &picture)
        })?);
        out.push(set.write_bytes(
            &format!("{stem}.cleanup.csv"),
            super::cleanup_csv(report).as_bytes(),
        )?);
    }
    Ok(out)
}

/// Writes the films into `dir` as one set (each file to a temporary name, then all
/// renamed into place). Returns the paths written.
pub fn write_films(
    dir: &Path,
    stem: &str,
    films: &FilmSet,
    formats: FilmFormats,
    job: &str,
) -> Result<Vec<PathBuf>> {
    let mut set = OutputSet::prepare(dir, &[])?;
    write_films_into(&mut set, stem, films, formats, job)?;
    set.commit()
}
