//! What a separation writes: plate names, plates, the proof, the swatches and the
//! summary table.

use super::regions::FIXED;
use super::tint;
use super::{Separation, SeparationDocument};
use crate::colour;
use crate::output::file_safe;
use rayon::prelude::*;

/// Plate file name.
pub fn plate_name(stem: &str, number: usize, ink: &str) -> String {
    format!("{stem}.plate-{number:02}-{}.png", file_safe(ink))
}

/// Writes a 1-bit plate: 0 (black) = ink, 1 (white) = no ink.
pub(super) fn write_plate<W: std::io::Write>(
    w: W,
    width: u32,
    height: u32,
    mask: &[bool],
    dpi: Option<f64>,
) -> std::io::Result<()> {
    let mut enc = png::Encoder::new(w, width, height);
    enc.set_color(png::ColorType::Grayscale);
    enc.set_depth(png::BitDepth::One);
    // The artwork's resolution (pHYs, pixels per metre), so a plate opens at print size.
    enc.set_pixel_dims(crate::raster::png_pixel_dims(dpi));
    let mut writer = enc.write_header().map_err(std::io::Error::other)?;
    let row_bytes = (width as usize).div_ceil(8);
    let mut packed = vec![0u8; row_bytes * height as usize];
    packed
        .par_chunks_mut(row_bytes)
        .enumerate()
        .for_each(|(y, out)| {
            let row = &mask[y * width as usize..(y + 1) * width as usize];
            for (x, &ink) in row.iter().enumerate() {
                if !ink {
                    out[x / 8] |= 0x80 >> (x % 8);
                }
            }
        });
    writer
        .write_image_data(&packed)
        .map_err(std::io::Error::other)?;
    writer.finish().map_err(std::io::Error::other)
}

/// The proof: inks laid lightest first on the substrate (white when none is given), a
/// tinted ink mixed with what lies under it by the model of `tint.rs`; transparent artwork
/// stays transparent.
pub fn proof_rgba(sep: &Separation, substrate: Option<[u8; 3]>) -> Vec<u8> {
    let paper = substrate.unwrap_or([255, 255, 255]);
    let ink_rgb: Vec<[u8; 3]> = sep
        .inks
        .iter()
        .map(|i| colour::parse_hex(&i.hex).unwrap_or([0, 0, 0]))
        .collect();
    let mut out = vec![0u8; sep.labels.len() * 4];
    out.par_chunks_mut(4).enumerate().for_each(|(p, px)| {
        if sep.labels[p] == FIXED {
            return;
        }
        let mut c = paper;
        for (i, m) in sep.masks.iter().enumerate() {
            if m[p] {
                c = match &sep.tints {
                    Some(t) if sep.labels[p] as usize == i && t[p] < 255 => {
                        let mix = tint::printed(t[p], tint::linear(ink_rgb[i]), tint::linear(c));
                        colour::linear_to_srgb8(mix)
                    }
                    _ => ink_rgb[i],
                };
            }
        }
        px[..3].copy_from_slice(&c);
        px[3] = 255;
    });
    out
}

pub(super) fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The swatch sheet: one card per ink with its patch, name, Lab, coverage and ΔE2000.
pub fn swatches_svg(doc: &SeparationDocument) -> String {
    let card_w = 220;
    let card_h = 150;
    let cols = doc.inks.len().clamp(1, 4);
    let rows = doc.inks.len().div_ceil(cols).max(1);
    let (w, h) = (cols * card_w + 20, rows * card_h + 60);
    let mut s = format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" font-family=\"sans-serif\">\n\
         <rect width=\"100%\" height=\"100%\" fill=\"#fafafa\"/>\n\
         <text x=\"10\" y=\"24\" font-size=\"16\">{} — {} inks, mean ΔE2000 {:.2}</text>\n\
         <text x=\"10\" y=\"44\" font-size=\"11\" fill=\"#555\">substrate {}, min area {} px, trap {} px</text>\n",
        xml_escape(doc.header.input.as_deref().unwrap_or("artwork")),
        doc.inks.len(),
        doc.mean_delta_e2000,
        doc.substrate.as_deref().unwrap_or("none"),
        doc.min_area,
        doc.trap
    );
    for (i, ink) in doc.inks.iter().enumerate() {
        let x = 10 + (i % cols) * card_w;
        let y = 56 + (i / cols) * card_h;
        s.push_str(&format!(
            "<g transform=\"translate({x},{y})\">\n\
             <rect x=\"0\" y=\"0\" width=\"{}\" height=\"{}\" fill=\"#fff\" stroke=\"#ccc\"/>\n\
             <rect x=\"8\" y=\"8\" width=\"64\" height=\"64\" fill=\"{}\" stroke=\"#333\"/>\n\
             <text x=\"80\" y=\"22\" font-size=\"13\" font-weight=\"bold\">{:02} {}</text>\n\
             <text x=\"80\" y=\"40\" font-size=\"11\">L* {:.1}  a* {:.1}  b* {:.1}</text>\n\
             <text x=\"80\" y=\"56\" font-size=\"11\">{}</text>\n\
             <text x=\"8\" y=\"94\" font-size=\"11\">coverage {:.1} %{}</text>\n\
             <text x=\"8\" y=\"112\" font-size=\"11\">mean ΔE2000 {:.2}</text>\n\
             <text x=\"8\" y=\"130\" font-size=\"9\" fill=\"#555\">{}</text>\n\
             </g>\n",
            card_w - 10,
            card_h - 10,
            ink.hex,
            i + 1,
            xml_escape(&ink.name),
            ink.lab_d50[0],
            ink.lab_d50[1],
            ink.lab_d50[2],
            ink.hex,
            ink.coverage * 100.0,
            ink.area_cm2
                .map(|a| format!(", {a:.1} cm²"))
                .unwrap_or_default(),
            ink.mean_delta_e2000,
            xml_escape(&ink.plate),
        ));
    }
    s.push_str("</svg>\n");
    s
}

/// The summary table printed on standard error.
pub fn summary_table(doc: &SeparationDocument) -> String {
    let mut s = format!(
        "{:<5} {:<24} {:>6} {:>6} {:>6} {:>9} {:>9} {:>9} {:>9}\n",
        "plate", "ink", "L*", "a*", "b*", "coverage", "printed", "area cm²", "ΔE2000"
    );
    for (i, ink) in doc.inks.iter().enumerate() {
        s.push_str(&format!(
            "{:<5} {:<24} {:>6.1} {:>6.1} {:>6.1} {:>8.1}% {:>8.1}% {:>9} {:>9.2}\n",
            format!("{:02}", i + 1),
            ink.name,
            ink.lab_d50[0],
            ink.lab_d50[1],
            ink.lab_d50[2],
            ink.coverage * 100.0,
            ink.coverage_printed * 100.0,
            ink.area_cm2
                .map(|a| format!("{a:.1}"))
                .unwrap_or_else(|| "-".into()),
            ink.mean_delta_e2000
        ));
    }
    s.push_str(&format!(
        "mean ΔE2000 {:.2} over the artwork; selection: {}; {} small regions merged; \
         coverage is of the inked area before trapping, printed after trapping{}",
        doc.mean_delta_e2000,
        doc.selection,
        doc.regions_merged,
        if doc.films.is_some() {
            " and cleanup"
        } else {
            ""
        }
    ));
    if let Some(f) = &doc.films {
        for film in &f.films {
            s.push_str(&format!(
                "\nfilm {:02} {:<24} order {:>2}  {:<22} {:>5.1}% of the artwork",
                film.number,
                film.ink,
                film.print_order,
                film.screen,
                film.coverage_of_artwork * 100.0
            ));
        }
    }
    s
}
