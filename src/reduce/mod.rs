//! The `reduce` workflow: an image to a K-colour palette chosen in CIELAB or OKLab,
//! with CIEDE2000 scores and an uncertainty map.

mod document;
mod loss;
mod pipeline;
mod write;

pub use document::{
    engine_used, not_applied, AnnealSetting, ColourProfileRecord, FixedPalette, GivenPalette,
    PaletteColour, PaletteDocument, ReduceSettings, DEFAULT_K,
};
pub use loss::{loss_map_png, pixel_delta_e2000, LOSS_SCALE_MAX};
pub use write::{
    encode_one, encode_reduced, loss_names, output_names, palette_csv, write_reduction, OneOutput,
    ReduceReport,
};
// Shared helpers that earlier releases offered here.
pub use crate::features::quality::{
    entry_delta_e2000, mean_and_p95, search_k, QualityTarget, TargetSearch, TargetStatistic,
};
pub use crate::features::rows::entry_features;
pub use crate::output::{fnv1a, stem_of, SourceStamp};
pub use crate::raster::MORE_FRAMES_NOTE;

use crate::cluster::{EngineOptions, KMeansParams};
use crate::colour::profile::{is_rgb_profile, ProfileUse};
use crate::colour::{self, Space};
use crate::error::{Error, Result};
use crate::families::Objective;
use crate::features::histogram::{self, IndexedHistogram};
use crate::features::image::{image_colours, profile_kind, ImageColours};
use crate::limits::Limits;
use crate::raster::{self, Decoded};
use crate::render::Dither;
use std::path::Path;
use std::time::Instant;

/// Settings of a reduction; defaults as documented on each field.
#[derive(Debug, Clone, PartialEq)]
pub struct ReduceOptions {
    /// Colours wanted (at least 1). Default: 8 ([`DEFAULT_K`]).
    pub k: usize,
    /// Clustering space. Default: CIELAB.
    pub space: Space,
    /// The k-means engine's settings (β in 1/ΔE*ab² for CIELAB).
    pub engine: EngineOptions,
    /// Dithering of the reduced image. Default: none.
    pub dither: Dither,
    /// Decode limits.
    pub limits: Limits,
    /// Also write the float uncertainty TIFF. Default: false.
    pub uncertainty_raw: bool,
    /// Choose K as the smallest meeting a colour-difference target (then `k` is unused).
    /// Default: off.
    pub target: Option<QualityTarget>,
    /// How colours are chosen: keep every distinct colour family (default) or plain
    /// squared error.
    pub objective: Objective,
    /// Colours that must be in the palette exactly (sRGB8); they count toward `k` and
    /// never move. Default: none.
    pub pinned: Vec<[u8; 3]>,
    /// The numbers the reduced image is written in. Default: the input's profile.
    pub output_profile: OutputProfile,
    /// Carry the input's EXIF, colour profile and resolution into the reduced image.
    /// Default: true; false writes none of them (and sRGB numbers).
    pub keep_metadata: bool,
    /// Also write the per-pixel CIEDE2000 map (`STEM.loss.tif` and `STEM.loss.png`).
    /// Default: false.
    pub loss_map: bool,
}

/// The numbers a reduced image is written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum OutputProfile {
    /// The input's own colour profile, embedded in the reduced image (sRGB for an
    /// untagged input).
    #[default]
    Source,
    /// sRGB, with no profile embedded.
    Srgb,
}

impl OutputProfile {
    /// The name used in settings and documents.
    pub fn name(self) -> &'static str {
        match self {
            OutputProfile::Source => "source",
            OutputProfile::Srgb => "srgb",
        }
    }
}

impl std::str::FromStr for OutputProfile {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "source" => Ok(OutputProfile::Source),
            "srgb" => Ok(OutputProfile::Srgb),
            _ => Err(format!("`output_profile` takes source or srgb (got '{s}')")),
        }
    }
}

impl ReduceOptions {
    /// Defaults for `k` colours.
    pub fn new(k: usize) -> Self {
        ReduceOptions {
            k,
            space: Space::Cielab,
            engine: EngineOptions::default(),
            dither: Dither::None,
            limits: Limits::default(),
            uncertainty_raw: false,
            target: None,
            objective: Objective::Families,
            pinned: Vec::new(),
            output_profile: OutputProfile::Source,
            keep_metadata: true,
            loss_map: false,
        }
    }

    /// The clustering parameters these options imply.
    pub fn kmeans_params(&self) -> KMeansParams {
        self.engine.params(self.k).pinned(
            self.pinned
                .iter()
                .flat_map(|&c| colour::linear_to_space(colour::srgb8_to_linear(c), self.space))
                .collect(),
        )
    }
}

impl ReduceOptions {
    /// Fingerprint of the settings that shape the outputs (and of a fixed palette, if any).
    pub fn fingerprint(&self, fixed: Option<&FixedPalette>) -> String {
        let text = format!(
            "{}|{}|{:?}|{:?}|{}|{}|{}|{}|{}|{}|{}|{}|{:?}|{:?}|{:?}",
            crate::TOOL_VERSION,
            self.k,
            self.engine.mode,
            self.engine.beta,
            self.space.name(),
            self.engine.seed,
            self.engine.restarts,
            self.engine.max_iter,
            self.engine.tolerance,
            self.engine.shift_tolerance,
            self.dither.name(),
            self.uncertainty_raw,
            fixed.map(|f| (f.colours.clone(), f.beta)),
            self.engine.anneal,
            self.target,
        );
        // Added after the fields above, only when used, so earlier fingerprints still hold.
        let text = if self.engine.split_merge > 0 && self.engine.anneal.is_none() {
            format!("{text}|split-merge {}", self.engine.split_merge)
        } else {
            text
        };
        let text = format!(
            "{text}|objective {}|pinned {:?}|refine {}",
            self.objective.name(),
            self.pinned,
            self.engine.refine
        );
        // Added only when not the default, so earlier fingerprints still hold.
        let mut text = text;
        if self.output_profile != OutputProfile::Source || !self.keep_metadata {
            text = format!(
                "{text}|output {} metadata {}",
                self.output_profile.name(),
                self.keep_metadata
            );
        }
        if self.loss_map {
            text = format!("{text}|loss map");
        }
        // A given palette: its order, names and file are in every output.
        if let Some(f) = fixed {
            text = format!(
                "{text}|given order, names {:?}, from {:?}",
                f.names, f.origin
            );
        }
        format!("{:016x}", fnv1a(text.as_bytes()))
    }
}

/// An image reduced in memory, ready to be written.
#[derive(Debug, Clone)]
pub struct Reduction {
    pub width: u32,
    pub height: u32,
    /// Palette colours: most used first for a fitted palette, in its own order (all of
    /// them) for a given one.
    pub palette: Vec<[u8; 3]>,
    /// Palette index of every pixel ([`NO_INDEX`] where alpha = 0).
    pub pixel_index: Vec<u16>,
    /// Source alpha (8-bit), when the source had any alpha below 255.
    pub alpha: Option<Vec<u8>>,
    /// Histogram entry of every pixel, and each entry's normalised entropy.
    pub pixel_entry: Vec<u32>,
    pub entry_uncertainty: Vec<f32>,
    pub document: PaletteDocument,
    /// Remarks for the user (e.g. fewer distinct colours than K).
    pub notes: Vec<String>,
    /// Problems with the result the user should act on (e.g. colours lost).
    pub warnings: Vec<String>,
    /// CIELAB (D65) of every histogram entry (for the per-pixel ΔE2000).
    pub entry_lab: Vec<[f64; 3]>,
    /// Each histogram entry's ΔE2000 to the palette colour it was mapped to, before any
    /// dithering, where the scoring computed it (empty otherwise).
    pub entry_error: Vec<f64>,
    /// What the reduced image carries from the input.
    pub metadata: OutputMetadata,
}

/// What a reduced image carries from its input.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OutputMetadata {
    /// The colour profile to embed.
    pub icc_profile: Option<Vec<u8>>,
    /// The EXIF block.
    pub exif: Option<Vec<u8>>,
    /// Print resolution, dots per inch.
    pub dpi: Option<f64>,
    /// The palette as written in the reduced image (numbers of the input's profile), when
    /// it differs from the sRGB `palette`.
    pub written_palette: Option<Vec<[u8; 3]>>,
}

/// Reduces a decoded image. Fails only on parameters or an image with no opaque pixel.
pub fn reduce_image(img: &Decoded, opts: &ReduceOptions) -> Result<Reduction> {
    reduce_image_with(img, opts, None)
}

/// Reduces a decoded image with a fitted palette, or maps it onto `fixed` colours.
pub fn reduce_image_with(
    img: &Decoded,
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
) -> Result<Reduction> {
    let mut ph = crate::trace::Phases::start("reduce");
    // The one reader of an image's colours: entries read through its embedded profile.
    let ImageColours {
        indexed: IndexedHistogram {
            histogram: hist,
            pixel_entry,
        },
        profile: read,
    } = image_colours(img);
    ph.mark("histogram");
    let alpha = if img.has_alpha {
        let a = img.alpha8();
        a.iter().any(|&v| v != 255).then_some(a)
    } else {
        None
    };
    let convert = match &read {
        Some(ProfileUse::Convert(p)) => Some(p.as_ref()),
        _ => None,
    };
    let px = pipeline::Pixels {
        entry: pixel_entry,
        width: img.width,
        height: img.height,
        alpha,
        fixed,
    };
    let mut red = pipeline::reduce_indexed(&hist, px, opts)?;
    if img.more_frames {
        red.notes.push(MORE_FRAMES_NOTE.into());
    }
    // The profile the reduced image is written in: the input's (embedded again), unless
    // sRGB was asked for, metadata are dropped, or the profile could not be applied.
    // A grey profile cannot go into the (colour) reduced PNG: such images are written in
    // sRGB numbers.
    let rgb = img.icc_profile.as_deref().is_some_and(is_rgb_profile);
    let keep_source = opts.output_profile == OutputProfile::Source && opts.keep_metadata;
    let (input, description, note) = profile_kind(read.as_ref());
    red.notes.extend(note);
    let embed = match &read {
        Some(ProfileUse::Srgb(_) | ProfileUse::Convert(_)) => keep_source && rgb,
        _ => false,
    };
    if keep_source && !rgb && matches!(read, Some(ProfileUse::Srgb(_) | ProfileUse::Convert(_))) {
        red.notes.push(format!(
            "the source's grey colour profile{} is not embedded: the reduced image is an RGB \
             PNG, so it is written in sRGB numbers (the colours are the same)",
            description
                .as_deref()
                .map(|d| format!(" ({d})"))
                .unwrap_or_default()
        ));
    }
    if embed {
        if let Some(p) = convert {
            red.metadata.written_palette = p.encode_srgb8(&red.palette);
        }
        red.metadata.icc_profile = img.icc_profile.clone();
    }
    if opts.keep_metadata {
        red.metadata.exif = img.exif.clone();
        red.metadata.dpi = img.dpi;
    }
    red.document.colour_profile = Some(ColourProfileRecord {
        input: input.into(),
        description,
        output: if embed || (input == "untagged" && keep_source) {
            "source"
        } else {
            "srgb"
        }
        .into(),
    });
    loss::record_percentiles(&mut red);
    Ok(red)
}

/// Fits a palette to a (possibly merged) histogram without an image: the palette document
/// of the whole set, as written by `learn` and `batch --shared`.
pub fn learn_palette(hist: &histogram::Histogram, opts: &ReduceOptions) -> Result<PaletteDocument> {
    let opts = ReduceOptions {
        dither: Dither::None,
        ..opts.clone()
    };
    let px = pipeline::Pixels {
        entry: Vec::new(),
        width: 0,
        height: 0,
        alpha: None,
        fixed: None,
    };
    Ok(pipeline::reduce_indexed(hist, px, &opts)?.document)
}

/// Reduces an image held in memory (for example read from standard input); `name` is
/// used in messages. Nothing is written.
pub fn reduce_bytes(bytes: &[u8], name: &Path, opts: &ReduceOptions) -> Result<Reduction> {
    opts.kmeans_params().check()?;
    let img = raster::decode_bytes(bytes, name, &opts.limits)?;
    reduce_image_with(&img, opts, None).map_err(|e| match e {
        Error::Data(message) => Error::InputData {
            path: name.into(),
            message,
        },
        other => other,
    })
}

/// Reads `input`, reduces it and writes all outputs into `out_dir` atomically.
pub fn reduce_file(input: &Path, out_dir: &Path, opts: &ReduceOptions) -> Result<ReduceReport> {
    reduce_file_run(input, out_dir, opts, &FileRun::default())
}

/// How [`reduce_file_run`] treats one input beyond the options.
#[derive(Debug, Clone, Copy, Default)]
pub struct FileRun<'a> {
    /// Map onto these colours instead of fitting (the `apply` workflow).
    pub fixed: Option<&'a FixedPalette>,
    /// Record the input's size and time and the settings fingerprint in the palette
    /// document, so a batch can tell later whether the outputs are up to date.
    pub stamp: bool,
    /// Files no output may replace (besides the input), such as `apply`'s palette document.
    pub spare: &'a [&'a Path],
    /// Name the outputs `{stem}.reduced.png` and so on (default: the input's file stem; a
    /// batch names two images of one folder that share a stem by their whole file names).
    pub stem: Option<&'a str>,
}

/// As [`reduce_file`], mapping onto `fixed` colours (the `apply` workflow); no output may
/// replace a file in `spare`.
pub fn reduce_file_with(
    input: &Path,
    out_dir: &Path,
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
    spare: &[&Path],
) -> Result<ReduceReport> {
    let run = FileRun {
        fixed,
        spare,
        ..FileRun::default()
    };
    reduce_file_run(input, out_dir, opts, &run)
}

/// Reads `input`, reduces it (or maps it onto a given palette) and writes all outputs into
/// `out_dir` atomically.
pub fn reduce_file_run(
    input: &Path,
    out_dir: &Path,
    opts: &ReduceOptions,
    run: &FileRun<'_>,
) -> Result<ReduceReport> {
    let t0 = Instant::now();
    let mut ph = crate::trace::Phases::start("reduce file");
    opts.kmeans_params().check()?;
    let stem = match run.stem {
        Some(s) => s.to_string(),
        None => stem_of(input)?,
    };
    let (fixed, stamp) = (run.fixed, run.stamp);
    let mut names = output_names(&stem).to_vec();
    if opts.loss_map {
        names.extend(loss_names(&stem));
    }
    let replaced = outputs_of_another_input(out_dir, &stem, input);
    let (red, outputs) = crate::output::one_input(
        input,
        out_dir,
        run.spare,
        &names,
        || raster::decode(input, &opts.limits),
        |img, set| {
            ph.mark("decode");
            let mut red = reduce_image_with(&img, opts, fixed)?;
            drop(img);
            red.document.header.input = input.file_name().map(|n| n.to_string_lossy().into_owned());
            if stamp {
                red.document.source = SourceStamp::of(input);
                red.document.settings_fingerprint = Some(opts.fingerprint(fixed));
            }
            ph.mark("reduce in memory");
            write_reduction(&red, &stem, set, opts.uncertainty_raw, opts.loss_map)?;
            ph.mark("encode and write");
            Ok(red)
        },
    )?;
    ph.mark("rename into place");
    let mut notes = red.notes;
    notes.extend(replaced);
    notes.extend(stale_outputs(out_dir, &stem, opts));
    Ok(ReduceReport {
        input: input.into(),
        outputs,
        document: red.document,
        notes,
        warnings: red.warnings,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// A note when the folder holds outputs of this stem made from another input (`p3.png`
/// then `p3.jpg`): they are replaced, and only the last input's set stays.
fn outputs_of_another_input(out_dir: &Path, stem: &str, input: &Path) -> Option<String> {
    let doc = out_dir.join(format!("{stem}.palette.json"));
    let meta = std::fs::metadata(&doc).ok()?;
    if !meta.is_file() || meta.len() > 1 << 24 {
        return None;
    }
    let value: serde_json::Value = serde_json::from_slice(&std::fs::read(&doc).ok()?).ok()?;
    let before = value.get("input")?.as_str()?.to_string();
    let now = input.file_name()?.to_string_lossy();
    (before != now).then(|| {
        format!(
            "the outputs {stem}.* in {} were made from {before}, which has the same name \
             stem; they are replaced by those of {now}",
            out_dir.display()
        )
    })
}

/// Notes on optional outputs of this stem that this run did not write but an earlier run
/// left in the folder (they no longer match the reduced image beside them).
fn stale_outputs(out_dir: &Path, stem: &str, opts: &ReduceOptions) -> Vec<String> {
    let mut optional: Vec<String> = Vec::new();
    if !opts.uncertainty_raw {
        optional.push(output_names(stem)[4].clone());
    }
    if !opts.loss_map {
        optional.extend(loss_names(stem));
    }
    optional
        .into_iter()
        .filter(|name| out_dir.join(name).is_file())
        .map(|name| {
            format!(
                "{} is left from an earlier run and was not rewritten by this one: it does \
                 not describe the new reduced image",
                out_dir.join(name).display()
            )
        })
        .collect()
}

#[cfg(test)]
mod tests;
