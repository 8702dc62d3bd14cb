//! The palette document (`STEM.palette.json`) and palettes given in advance.

use super::ReduceOptions;
use crate::cluster::{Beta, EngineOptions, Mode, Refine};
use crate::colour::{self, Space};
use crate::families::{LostArea, Objective};
use crate::features::image::InputProfile;
use crate::features::quality::QualityTarget;
use crate::output::DocumentHeader;
use crate::output::SourceStamp;
use serde::{Deserialize, Serialize};

/// One palette colour in the palette document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PaletteColour {
    /// Position in the palette (also the index in the indexed PNG).
    pub index: usize,
    /// `#rrggbb`, the sRGB colour written to the reduced image.
    pub hex: String,
    /// The colour's name, when a given palette names it (a `name` column, a name after a
    /// hex code, or a palette document's names).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name: Option<String>,
    /// CIELAB (D65) of that sRGB colour.
    pub lab: [f64; 3],
    /// Pixels that took this colour.
    pub pixels: u64,
    /// Fraction of the clustered (non-transparent) pixels.
    pub share: f64,
    /// Mean normalised entropy (0..1) of those pixels.
    pub mean_uncertainty: f64,
}

/// Settings recorded so a result can be reproduced.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReduceSettings {
    pub k_requested: usize,
    pub beta_setting: String,
    pub restarts: usize,
    pub max_iter: usize,
    pub tolerance: f64,
    #[serde(default)]
    pub shift_tolerance: f64,
    pub dither: String,
    /// The annealing schedule, when used.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub anneal: Option<AnnealSetting>,
    /// The colour-difference target K was chosen by, when used.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub target: Option<QualityTarget>,
    /// Most split-and-merge moves after each k-means++ start (`--split-merge`), when used.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub split_merge: usize,
    /// How colours were chosen (`families` or `sse`); documents written before the choice
    /// existed read as `sse`.
    #[serde(default = "objective_plain")]
    pub objective: Objective,
    /// Moves that brought back lost colour families (objective `families`).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub family_moves: usize,
    /// Pinned colours (`#rrggbb`), when any.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub pinned: Vec<String>,
    /// Settings that were given but a given palette makes meaningless (they shape only how
    /// a palette is fitted), by their option names; absent when none.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub not_applied: Vec<String>,
}

fn objective_plain() -> Objective {
    Objective::Plain
}

fn is_zero(n: &usize) -> bool {
    *n == 0
}

/// The annealing schedule as recorded in the palette document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AnnealSetting {
    pub start: f64,
    pub end: f64,
    pub factor: f64,
    /// Most split-and-merge moves allowed after the last stage (`--split-merge`); absent
    /// in documents written before the moves existed, which read as 0.
    #[serde(default)]
    pub max_moves: usize,
}

/// The palette document (`STEM.palette.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PaletteDocument {
    /// Tool version, input, seed and every engine setting.
    #[serde(flatten)]
    pub header: DocumentHeader,
    pub space: Space,
    pub mode: Mode,
    /// Colours actually returned.
    pub k: usize,
    /// β used (1/ΔE*ab² in CIELAB, 1/OKLab-unit² in OKLab); null when infinite
    /// (every colour sits on a palette mean).
    pub beta: Option<f64>,
    pub iterations: usize,
    /// k-means objective: Σ over clustered pixels of the squared distance, in the
    /// clustering space, to the nearest final mean.
    pub sse: f64,
    /// Mean CIE76 ΔE*ab between each source pixel and its reduced pixel.
    pub mean_delta_e76: f64,
    /// Mean CIEDE2000 between each source pixel and its reduced pixel.
    pub mean_delta_e2000: f64,
    /// 95th and 99th percentiles of the per-pixel CIEDE2000 (over the opaque pixels: the
    /// smallest value at least that share of them is within). Absent for a palette learnt
    /// from histograms, which has no pixels.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub p95_delta_e2000: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub p99_delta_e2000: Option<f64>,
    /// How the input's colours were read and the reduced image's written (absent for a
    /// palette learnt from histograms).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub colour_profile: Option<ColourProfileRecord>,
    /// How each input's colours were read, for a palette learnt from many inputs (`learn`,
    /// `batch --shared`), in input order.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub input_profiles: Vec<InputProfile>,
    pub colors: Vec<PaletteColour>,
    /// Areas of the image whose every pixel is more than ΔE2000 10 from its palette colour:
    /// what the palette lost. Those of at least 0.1 % of the opaque pixels or 400 pixels,
    /// and smaller solid ones, down to 16 pixels, rendered on average at least ΔE2000 20
    /// from their colour (see `families::lost_areas`).
    /// Empty for a palette learnt from histograms alone, which has no image.
    #[serde(default)]
    pub lost_areas: Vec<LostArea>,
    pub settings: ReduceSettings,
    /// Size and modification time of the input (batch runs use it to resume).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<SourceStamp>,
    /// Fingerprint of every setting that shapes the outputs (batch runs use it to resume).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub settings_fingerprint: Option<String>,
    /// The palette the image was mapped onto, when one was given (`apply`, `batch
    /// --palette`, `batch --shared`); `colors` then lists its colours in its own order.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub given_palette: Option<GivenPalette>,
}

/// Where a given palette came from, as recorded in the documents.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct GivenPalette {
    /// The file's name without its folder, as the document names its input image
    /// (`shared.palette.json` for a batch's shared palette); `sha256` identifies it.
    pub file: String,
    /// SHA-256 of the file's bytes, as lowercase hex (what `sha256sum` prints).
    pub sha256: String,
    /// Colours in the palette.
    pub colours: usize,
}

impl GivenPalette {
    /// The record of a palette read from `file` (named as given) holding `bytes`.
    pub fn of_bytes(file: &str, bytes: &[u8], colours: usize) -> GivenPalette {
        use sha2::Digest;
        let digest = sha2::Sha256::digest(bytes);
        GivenPalette {
            file: file.to_string(),
            sha256: digest.iter().map(|b| format!("{b:02x}")).collect(),
            colours,
        }
    }
}

/// How an image's colours were read and its reduced image written.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ColourProfileRecord {
    /// `icc` (converted through the embedded profile), `icc-srgb` (an embedded profile that
    /// matches sRGB), `icc-unused` (a profile that cannot be applied: read as sRGB, see the
    /// notes) or `untagged` (no profile: read as sRGB, as is common practice).
    pub input: String,
    /// The embedded profile's description, when there is one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    /// The numbers of the reduced image: `source` (in the input's profile, embedded) or
    /// `srgb` (sRGB; the profile is not embedded).
    pub output: String,
}

/// A palette given in advance (from a palette document): its colours and, optionally,
/// the β to use for the uncertainty map (default: automatic for the image at hand).
/// Every output lists its colours in this order, and pixel value i of the indexed PNG is
/// colour i.
#[derive(Debug, Clone, PartialEq)]
pub struct FixedPalette {
    pub colours: Vec<[u8; 3]>,
    pub beta: Option<f64>,
    /// The space the palette was chosen in: pixels are mapped to it there.
    pub space: Space,
    /// Each colour's name, when the palette names any (else empty).
    pub names: Vec<Option<String>>,
    /// The file it was read from, when known (recorded in each document).
    pub origin: Option<GivenPalette>,
    /// Learnt in the same run with the same settings (`batch --shared`): the fitting
    /// settings acted there, so they are recorded as asked, not as unused.
    pub learnt_in_run: bool,
}

impl FixedPalette {
    /// The name of colour `i`, if any.
    pub fn name(&self, i: usize) -> Option<&str> {
        self.names.get(i).and_then(|n| n.as_deref())
    }

    /// Whether any colour has a name.
    pub fn has_names(&self) -> bool {
        self.names.iter().any(Option::is_some)
    }
}

impl FixedPalette {
    /// The colours, β and space of a palette document. Each colour's `lab` must be the
    /// CIELAB of its `hex` (within ΔE2000 0.5): an edited value that disagrees is refused
    /// instead of one of the two being chosen silently.
    pub fn from_document(doc: &PaletteDocument) -> std::result::Result<Self, String> {
        let mut colours = Vec::with_capacity(doc.colors.len());
        for (i, c) in doc.colors.iter().enumerate() {
            let rgb = colour::parse_hex(&c.hex).map_err(|e| format!("colour {i}: {e}"))?;
            let lab = colour::srgb8_to_lab(rgb);
            let off = if c.lab.iter().all(|v| v.is_finite()) {
                colour::delta_e2000(lab, c.lab)
            } else {
                f64::INFINITY
            };
            if off.is_nan() || off > 0.5 {
                return Err(format!(
                    "colour {i}: lab [{:.2}, {:.2}, {:.2}] is not the CIELAB of {} \
                     ([{:.2}, {:.2}, {:.2}], ΔE2000 {off:.2} apart); make the two agree",
                    c.lab[0], c.lab[1], c.lab[2], c.hex, lab[0], lab[1], lab[2]
                ));
            }
            colours.push(rgb);
        }
        if colours.is_empty() {
            return Err("the palette has no colours".into());
        }
        let names: Vec<Option<String>> = doc.colors.iter().map(|c| c.name.clone()).collect();
        Ok(FixedPalette {
            colours,
            beta: doc.beta,
            space: doc.space,
            names: if names.iter().any(Option::is_some) {
                names
            } else {
                Vec::new()
            },
            origin: None,
            learnt_in_run: false,
        })
    }
}

/// The engine settings as the document records them: a ΔE2000 target follows the
/// warm-started K path (refined, but no restarts, annealing or moves); a given palette is
/// mapped, not fitted (only β, for the uncertainty map, applies).
pub fn engine_used(opts: &ReduceOptions, fixed: bool) -> EngineOptions {
    let e = opts.engine;
    if fixed {
        EngineOptions {
            beta: e.beta,
            seed: e.seed,
            refine: Refine::None,
            ..EngineOptions::default()
        }
    } else if opts.target.is_some() {
        EngineOptions {
            restarts: 1,
            anneal: None,
            split_merge: 0,
            ..e
        }
    } else {
        e
    }
}

/// The settings as recorded in the palette document. With a given palette, `k_requested`
/// is the palette's size and the engine settings are those that applied (see
/// [`engine_used`]); settings it makes meaningless are listed in `not_applied`.
pub(super) fn settings(
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
    family_moves: usize,
) -> ReduceSettings {
    let used = engine_used(opts, fixed.is_some());
    ReduceSettings {
        k_requested: match fixed {
            Some(f) if !f.learnt_in_run => f.colours.len(),
            _ => opts.k,
        },
        beta_setting: match opts.engine.beta {
            Beta::Auto => "auto".into(),
            Beta::Fixed(b) => b.to_string(),
        },
        restarts: used.restarts,
        max_iter: used.max_iter,
        tolerance: used.tolerance,
        shift_tolerance: used.shift_tolerance,
        dither: opts.dither.name().into(),
        anneal: used.anneal.map(|a| AnnealSetting {
            start: a.start,
            end: a.end,
            factor: a.factor,
            max_moves: a.split_merge,
        }),
        target: if fixed.is_some() { None } else { opts.target },
        // Recorded only where it acted: after k-means++ starts, not with annealing (which
        // records its own), a ΔE2000 target's K path, or a fixed palette.
        split_merge: if opts.engine.anneal.is_none() && opts.target.is_none() && fixed.is_none() {
            opts.engine.split_merge
        } else {
            0
        },
        objective: opts.objective,
        family_moves,
        pinned: if fixed.is_some() {
            Vec::new()
        } else {
            opts.pinned.iter().map(|&c| colour::hex(c)).collect()
        },
        not_applied: match fixed {
            Some(f) if !f.learnt_in_run => not_applied(opts, f),
            _ => Vec::new(),
        },
    }
}

/// Colours a reduction fits when none is asked for (`k`'s default).
pub const DEFAULT_K: usize = 8;

/// The settings, set away from their defaults, that a given palette makes meaningless:
/// they shape only how a palette is fitted. Named as the documents name them (`k`,
/// `restarts`, `mode`, ...); β is not among them (it sets the uncertainty map's sharpness).
pub fn not_applied(opts: &ReduceOptions, palette: &FixedPalette) -> Vec<String> {
    let mut out: Vec<String> = [
        (opts.k != DEFAULT_K, "k"),
        (
            opts.space != Space::Cielab && opts.space != palette.space,
            "space",
        ),
        (opts.target.is_some(), "target"),
        (opts.objective != Objective::Families, "objective"),
        (!opts.pinned.is_empty(), "pinned"),
    ]
    .into_iter()
    .filter(|&(set, _)| set)
    .map(|(_, name)| name.to_string())
    .collect();
    out.extend(
        opts.engine
            .changed()
            .into_iter()
            .filter(|n| *n != "beta")
            .map(str::to_string),
    );
    out
}
