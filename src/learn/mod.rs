//! The `learn` workflow: one palette from many images or histogram files, without
//! reducing anything; and reading a palette document back for `apply` and batches.

use crate::error::{Error, Result};
use crate::features::histogram_file;
use crate::limits::Limits;
use crate::reduce::{learn_palette, FixedPalette, PaletteDocument, ReduceOptions};
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
    let (hist, failures) = histogram_file::gather_lenient(inputs, &opts.limits)?;
    let document = learn_palette(&hist, opts)?;
    let read = histogram_file::input_files(inputs)?;
    Ok(Learnt {
        document,
        failures,
        read,
    })
}

/// Reads a palette document (from `learn`, `reduce` or `batch --shared`) as a palette to
/// map images onto. Every colour's `lab` must agree with its `hex`.
pub fn read_palette(path: &Path) -> Result<FixedPalette> {
    let limits = Limits::default();
    let text = limits
        .read_text(path, "palette document")
        .map_err(|e| match e {
            Error::Decode { path, message } if message.contains("UTF-8") => Error::Decode {
                path,
                message: "not a palette document: not UTF-8 text".into(),
            },
            e => e,
        })?;
    let bad = |message: String| Error::Decode {
        path: path.into(),
        message,
    };
    let value: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| bad(format!("not a palette document: {e}")))?;
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
