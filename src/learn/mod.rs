//! The `learn` workflow: one palette from many images or histogram files, without
//! reducing anything; and reading a palette document back for `apply` and batches.

use crate::colour::{
    self,
    table::{parse_table, TableRules},
    Space,
};
use crate::error::{Error, Result};
use crate::features::histogram_file;
use crate::limits::Limits;
use crate::reduce::{learn_palette, FixedPalette, GivenPalette, PaletteDocument, ReduceOptions};
use std::path::{Path, PathBuf};

/// What [`learn`] made.
#[derive(Debug)]
pub struct Learnt {
    /// The palette document of the whole set.
    pub document: PaletteDocument,
    /// Inputs that could not be read (the others were used), in input order.
    pub failures: Vec<(PathBuf, Error)>,
    /// Every file read (an output must not replace one of them).
    pub read: Vec<PathBuf>,
}

/// Learns one palette from `inputs` (folders, image files and histogram files), merged
/// into one exact histogram. Inputs that cannot be read are left out and listed.
pub fn learn(inputs: &[PathBuf], opts: &ReduceOptions) -> Result<Learnt> {
    opts.kmeans_params().check()?;
    let pooled = histogram_file::gather_lenient(inputs, &opts.limits)?;
    let mut document = learn_palette(&pooled.histogram, opts)?;
    document.input_profiles = pooled.inputs;
    let read = histogram_file::input_files(inputs)?;
    Ok(Learnt {
        document,
        failures: pooled.failures,
        read,
    })
}

/// How far apart (ΔE2000) a table row's `hex` and `L,a,b` may be: the CIELAB of an 8-bit
/// sRGB colour typed with one decimal, or the nearest 8-bit colour of a typed CIELAB value,
/// stays well within it; a row whose two values disagree by more is refused.
pub const TABLE_HEX_LAB_TOLERANCE: f64 = 1.0;

/// A palette table: rows need not be named; CIELAB columns are D65, like the palette
/// document's `lab` and the `L,a,b` columns of `STEM.palette.csv`.
const PALETTE_TABLE: TableRules = TableRules {
    name_required: false,
    hex_list: true,
    what: "palette",
};

/// Reads a palette to map images onto, from any of: a palette document (from `learn`,
/// `reduce` or `batch --shared`; every colour's `lab` must agree with its `hex`), a plain
/// list of hex colours (one per line; comments start with `# ` or `//`), or a colour table
/// (CSV or a JSON array, read as ink libraries are) with `hex` and/or CIELAB D65 `L,a,b`
/// columns; a row giving both must agree within [`TABLE_HEX_LAB_TOLERANCE`]. Names (a
/// table's `name` column, a name after a list's hex code, a document's `name` fields) are
/// kept, and the palette records the file (as named) and its SHA-256.
pub fn read_palette(path: &Path) -> Result<FixedPalette> {
    let limits = Limits::default();
    let text = limits.read_text(path, "palette").map_err(|e| match e {
        Error::Decode { path, message } if message.contains("UTF-8") => Error::Decode {
            path,
            message: "not a palette document or colour list: not UTF-8 text".into(),
        },
        e => e,
    })?;
    let body = text.strip_prefix('\u{feff}').unwrap_or(&text);
    let mut palette = if body.trim_start().starts_with('{') {
        read_document(body, path, &limits)?
    } else {
        palette_from_table(body, path, &limits)?
    };
    // Named without its folder, as a document names its input image: the same palette
    // used from two places gives the same documents (the SHA-256 identifies it).
    let name = path
        .file_name()
        .unwrap_or(path.as_os_str())
        .to_string_lossy();
    palette.origin = Some(GivenPalette::of_bytes(
        &name,
        text.as_bytes(),
        palette.colours.len(),
    ));
    Ok(palette)
}

/// The colours of a palette table, each as its 8-bit sRGB colour.
fn palette_from_table(text: &str, path: &Path, limits: &Limits) -> Result<FixedPalette> {
    let rows = parse_table(text, path, PALETTE_TABLE)?;
    if rows.is_empty() {
        return Err(Error::Table {
            path: path.into(),
            line: None,
            message: "the palette has no colours".into(),
        });
    }
    if rows.len() > limits.max_entries {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!(
                "the palette has {} colours; at most {} are accepted",
                rows.len(),
                limits.max_entries
            ),
        });
    }
    // Rows of a JSON array are numbered entries, not lines.
    let json = text.trim_start().starts_with('[');
    let row_error = |line: usize, message: String| Error::Table {
        path: path.into(),
        line: (!json).then_some(line),
        message: if json {
            format!("entry {line}: {message}")
        } else {
            message
        },
    };
    let fmt = |l: [f64; 3]| format!("{:.2},{:.2},{:.2}", l[0], l[1], l[2]);
    let mut colours: Vec<[u8; 3]> = Vec::with_capacity(rows.len());
    let names: Vec<Option<String>> = if rows.iter().any(|r| r.name.is_some()) {
        rows.iter().map(|r| r.name.clone()).collect()
    } else {
        Vec::new()
    };
    let mut first_line: std::collections::HashMap<[u8; 3], usize> = Default::default();
    for r in &rows {
        let c = match (r.hex, r.lab) {
            (Some(hex), Some(lab)) => {
                let of_hex = colour::srgb8_to_lab(hex);
                let off = colour::delta_e2000(of_hex, lab);
                if off > TABLE_HEX_LAB_TOLERANCE {
                    return Err(row_error(
                        r.line,
                        format!(
                            "hex {} (CIELAB {}) and L,a,b {} are ΔE2000 {off:.2} apart, more \
                             than {TABLE_HEX_LAB_TOLERANCE}; correct one of them or give only one",
                            colour::hex(hex),
                            fmt(of_hex),
                            fmt(lab)
                        ),
                    ));
                }
                hex
            }
            (Some(hex), None) => hex,
            (None, Some(lab)) => {
                let c = colour::space_to_srgb8(lab, Space::Cielab);
                let off = colour::delta_e2000(lab, colour::srgb8_to_lab(c));
                if off > TABLE_HEX_LAB_TOLERANCE {
                    return Err(row_error(
                        r.line,
                        format!(
                            "L,a,b {} is outside sRGB: the nearest sRGB colour, {}, is ΔE2000 \
                             {off:.1} away",
                            fmt(lab),
                            colour::hex(c)
                        ),
                    ));
                }
                c
            }
            (None, None) => return Err(row_error(r.line, "needs L, a, b or hex".into())),
        };
        if let Some(first) = first_line.insert(c, r.line) {
            return Err(row_error(
                r.line,
                format!(
                    "{} is listed twice (first at line {first}); a palette holds each colour once",
                    colour::hex(c)
                ),
            ));
        }
        colours.push(c);
    }
    Ok(FixedPalette {
        colours,
        beta: None,
        space: Space::Cielab,
        names,
        origin: None,
        learnt_in_run: false,
    })
}

fn read_document(text: &str, path: &Path, limits: &Limits) -> Result<FixedPalette> {
    let bad = |message: String| Error::Decode {
        path: path.into(),
        message,
    };
    let value: serde_json::Value =
        serde_json::from_str(text).map_err(|e| bad(format!("not a palette document: {e}")))?;
    if !value.is_object() {
        return Err(bad(
            "not a palette document: expected a JSON object (a palette.json written by \
             reduce, learn or batch --shared)"
                .into(),
        ));
    }
    let doc: PaletteDocument =
        serde_json::from_value(value).map_err(|e| bad(format!("not a palette document: {e}")))?;
    if doc.colors.len() > limits.max_entries {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!(
                "the palette has {} colours; at most {} are accepted",
                doc.colors.len(),
                limits.max_entries
            ),
        });
    }
    FixedPalette::from_document(&doc).map_err(bad)
}
