//! Encoding and writing the outputs of a reduction.

use super::{PaletteDocument, Reduction};
use crate::error::Result;
use crate::output::OutputSet;
use crate::raster;
use crate::render::{self, NO_INDEX};
use rayon::prelude::*;
use std::path::PathBuf;

/// Output file names for a given stem (exact names other tools read).
pub fn output_names(stem: &str) -> [String; 5] {
    [
        format!("{stem}.reduced.png"),
        format!("{stem}.palette.json"),
        format!("{stem}.palette.csv"),
        format!("{stem}.uncertainty.png"),
        format!("{stem}.uncertainty.tif"),
    ]
}

/// The loss map's file names for a given stem: the float TIFF and the picture.
pub fn loss_names(stem: &str) -> [String; 2] {
    [format!("{stem}.loss.tif"), format!("{stem}.loss.png")]
}

/// The palette rows as CSV with a header. A `name` column is added at the end when a
/// given palette names any of its colours (empty for the unnamed ones), so one file has
/// one shape and files of unnamed palettes keep the columns they always had.
pub fn palette_csv(doc: &PaletteDocument) -> String {
    let named = doc.colors.iter().any(|c| c.name.is_some());
    let mut s = String::from("index,hex,L,a,b,pixels,share,mean_uncertainty");
    s.push_str(if named { ",name\n" } else { "\n" });
    for c in &doc.colors {
        s.push_str(&format!(
            "{},{},{:.4},{:.4},{:.4},{},{:.6},{:.6}",
            c.index, c.hex, c.lab[0], c.lab[1], c.lab[2], c.pixels, c.share, c.mean_uncertainty
        ));
        if named {
            s.push(',');
            s.push_str(&csv_field(c.name.as_deref().unwrap_or("")));
        }
        s.push('\n');
    }
    s
}

/// A CSV field, quoted when it holds a comma, a quote or a line break.
fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Encodes the reduced image: indexed PNG when the palette (plus one transparent entry
/// if needed) fits in 256 entries and alpha is only 0 or 255; RGBA PNG otherwise.
pub fn encode_reduced(red: &Reduction, w: &mut impl std::io::Write) -> std::io::Result<()> {
    let m = &red.metadata;
    let extras = raster::PngExtras {
        icc_profile: m.icc_profile.as_deref(),
        exif: m.exif.as_deref(),
        dpi: m.dpi,
    };
    // The palette in the numbers of the profile the image is written in.
    let palette = m.written_palette.as_ref().unwrap_or(&red.palette);
    let binary_alpha = red
        .alpha
        .as_ref()
        .is_none_or(|a| a.iter().all(|&v| v == 0 || v == 255));
    let has_transparent = red.pixel_index.contains(&NO_INDEX);
    let entries = red.palette.len() + has_transparent as usize;
    if binary_alpha && entries <= 256 {
        let t = palette.len() as u16;
        let mut pal = palette.clone();
        if has_transparent {
            pal.push([0, 0, 0]);
        }
        let idx: Vec<u8> = red
            .pixel_index
            .iter()
            .map(|&i| if i == NO_INDEX { t as u8 } else { i as u8 })
            .collect();
        raster::write_indexed_png_with(
            w,
            red.width,
            red.height,
            &pal,
            has_transparent.then_some(t as u8),
            &idx,
            &extras,
        )
    } else {
        let mut rgba = vec![0u8; red.pixel_index.len() * 4];
        rgba.par_chunks_mut(4).enumerate().for_each(|(p, px)| {
            let i = red.pixel_index[p];
            if i != NO_INDEX {
                let c = palette[i as usize];
                px[..3].copy_from_slice(&c);
                px[3] = red.alpha.as_ref().map_or(255, |a| a[p]);
            }
        });
        raster::write_rgba_png_with(w, red.width, red.height, &rgba, &extras)
    }
}

/// One output of a reduction, for `--stdout`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OneOutput {
    /// `STEM.reduced.png`.
    Reduced,
    /// `STEM.uncertainty.png`.
    Uncertainty,
    /// `STEM.palette.json`.
    Palette,
}

impl std::str::FromStr for OneOutput {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "reduced" => Ok(OneOutput::Reduced),
            "uncertainty" => Ok(OneOutput::Uncertainty),
            "palette" => Ok(OneOutput::Palette),
            _ => Err(format!(
                "`stdout` takes reduced, uncertainty or palette (got '{s}')"
            )),
        }
    }
}

/// Encodes one output of a reduction, byte for byte as [`write_reduction`] writes it.
pub fn encode_one(red: &Reduction, which: OneOutput) -> Vec<u8> {
    let mut out = Vec::new();
    match which {
        OneOutput::Reduced => encode_reduced(red, &mut out).expect("writing to memory"),
        OneOutput::Uncertainty => {
            let grey = render::uncertainty_u8(&red.pixel_entry, &red.entry_uncertainty);
            raster::write_grey_png(&mut out, red.width, red.height, &grey)
                .expect("writing to memory")
        }
        OneOutput::Palette => {
            let json =
                serde_json::to_string_pretty(&red.document).expect("palette document serialises");
            out.extend_from_slice(format!("{json}\n").as_bytes());
        }
    }
    out
}

/// Writes every output of a reduction into `set` (not yet committed).
pub fn write_reduction(
    red: &Reduction,
    stem: &str,
    set: &mut OutputSet,
    uncertainty_raw: bool,
    loss_map: bool,
) -> Result<Vec<PathBuf>> {
    let names = output_names(stem);
    let mut written = Vec::new();
    written.push(set.write(&names[0], |w| encode_reduced(red, w))?);
    written.push(set.write_bytes(&names[2], palette_csv(&red.document).as_bytes())?);
    let grey = render::uncertainty_u8(&red.pixel_entry, &red.entry_uncertainty);
    written.push(set.write(&names[3], |w| {
        raster::write_grey_png(w, red.width, red.height, &grey)
    })?);
    if uncertainty_raw {
        let f = render::uncertainty_f32(&red.pixel_entry, &red.entry_uncertainty);
        written.push(set.write(&names[4], |w| {
            raster::write_f32_tiff(w, red.width, red.height, &f)
        })?);
    }
    if loss_map {
        let [tif, png] = loss_names(stem);
        let loss = super::loss::pixel_delta_e2000(red);
        written.push(set.write(&tif, |w| {
            raster::write_f32_tiff(w, red.width, red.height, &loss)
        })?);
        written.push(set.write(&png, |w| super::loss::loss_map_png(red, &loss, w))?);
    }
    // The palette document goes last: files are renamed into place in the order they
    // were written, so a set whose palette.json carries the current settings fingerprint
    // is complete even if the process was killed part-way through the renames.
    let json = serde_json::to_string_pretty(&red.document).expect("palette document serialises");
    written.push(set.write_bytes(&names[1], format!("{json}\n").as_bytes())?);
    Ok(written)
}

/// What [`reduce_file`] did.
#[derive(Debug, Clone)]
pub struct ReduceReport {
    pub input: PathBuf,
    pub outputs: Vec<PathBuf>,
    pub document: PaletteDocument,
    pub notes: Vec<String>,
    /// Problems with the result the user should act on (e.g. colours lost).
    pub warnings: Vec<String>,
    pub seconds: f64,
}
