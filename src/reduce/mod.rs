//! The `reduce` workflow: an image to a K-colour palette chosen in CIELAB or OKLab,
//! with CIEDE2000 scores and an uncertainty map.

use crate::cluster::{
    finish, fit_hard, stop_rule, Anneal, Beta, Dataset, KMeansModel, KMeansParams, Mode,
    ValidParams,
};
use crate::colour::{self, Space};
use crate::error::{Error, Result};
use crate::families::{self, LostArea, Objective};
use crate::features::histogram::{self, IndexedHistogram};
use crate::limits::Limits;
use crate::output::OutputSet;
use crate::raster::{self, Decoded, Pixels};
use crate::render::{self, Dither, NO_INDEX};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Settings of a reduction; defaults as documented on each field.
#[derive(Debug, Clone, PartialEq)]
pub struct ReduceOptions {
    /// Colours wanted (at least 1). Default: 8.
    pub k: usize,
    /// Hard or soft k-means. Default: hard.
    pub mode: Mode,
    /// Soft sharpness, in 1/ΔE*ab² for CIELAB. Default: auto (1/σ² of the hard solution).
    pub beta: Beta,
    /// Clustering space. Default: CIELAB.
    pub space: Space,
    /// Seed. Default: [`crate::rng::DEFAULT_SEED`].
    pub seed: u64,
    /// k-means++ restarts, lowest SSE kept. Default: 1.
    pub restarts: usize,
    /// Iteration cap per phase. Default: 300.
    pub max_iter: usize,
    /// Relative objective change that ends the iterations. Default: 1e-6.
    pub tolerance: f64,
    /// Hard phase stops when the means' summed squared move is at most this times the
    /// data's mean variance per dimension. Default: 1e-4.
    pub shift_tolerance: f64,
    /// Dithering of the reduced image. Default: none.
    pub dither: Dither,
    /// Decode limits.
    pub limits: Limits,
    /// Also write the float uncertainty TIFF. Default: false.
    pub uncertainty_raw: bool,
    /// Start from deterministic annealing instead of k-means++. Default: off.
    pub anneal: Option<Anneal>,
    /// Most split-and-merge moves after each k-means++ start (with annealing, its own
    /// `Anneal::split_merge` applies instead). Default: 0.
    pub split_merge: usize,
    /// Choose K as the smallest meeting a colour-difference target (then `k` is unused).
    /// Default: off.
    pub target: Option<QualityTarget>,
    /// How colours are chosen: keep every distinct colour family (default) or plain
    /// squared error.
    pub objective: Objective,
    /// Colours that must be in the palette exactly (sRGB8); they count toward `k` and
    /// never move. Default: none.
    pub pinned: Vec<[u8; 3]>,
}

/// Which statistic of the per-pixel CIEDE2000 a target bounds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum TargetStatistic {
    /// Mean over pixels.
    Mean,
    /// 95th percentile over pixels (the smallest ΔE that at least 95 % of pixels are within).
    P95,
}

impl TargetStatistic {
    pub fn name(self) -> &'static str {
        match self {
            TargetStatistic::Mean => "mean",
            TargetStatistic::P95 => "95th percentile",
        }
    }
}

/// "The fewest colours whose CIEDE2000 is at most `delta_e`", searched K = 1..=`k_max`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct QualityTarget {
    /// Largest acceptable ΔE2000 (of the chosen statistic).
    pub delta_e: f64,
    pub statistic: TargetStatistic,
    /// Largest K tried.
    pub k_max: usize,
}

impl QualityTarget {
    /// Checks the target's numbers.
    pub fn check(&self) -> Result<()> {
        if !(self.delta_e.is_finite() && self.delta_e >= 0.0) {
            return Err(Error::Params(crate::error::ParamsError::BadTarget(
                format!(
                    "--target-delta-e must be a finite number >= 0 (got {})",
                    self.delta_e
                ),
            )));
        }
        if self.k_max == 0 || self.k_max > crate::cluster::MAX_K {
            return Err(Error::Params(crate::error::ParamsError::BadTarget(
                format!(
                    "--k-max must be between 1 and {} (got {})",
                    crate::cluster::MAX_K,
                    self.k_max
                ),
            )));
        }
        Ok(())
    }
}

/// Per-entry CIEDE2000 between each colour (`labs`) and the palette colour of its
/// cluster, the cluster means (`k × 3`, in `space`) rounded to sRGB8 as they are written.
pub fn entry_delta_e2000(
    means: &[f64],
    labels: &[u32],
    labs: &[[f64; 3]],
    space: Space,
) -> Vec<f64> {
    let palette_lab: Vec<[f64; 3]> = means
        .chunks_exact(3)
        .map(|m| colour::srgb8_to_lab(colour::space_to_srgb8([m[0], m[1], m[2]], space)))
        .collect();
    labels
        .par_iter()
        .zip(labs.par_iter())
        .with_min_len(4096)
        .map(|(&l, lab)| colour::delta_e2000(*lab, palette_lab[l as usize]))
        .collect()
}

/// Weighted mean (Σ w·v / `total`, summed in entry order) and weighted 95th percentile
/// (the smallest value that entries holding at least 95 % of the weight are within).
pub fn mean_and_p95(values: &[f64], weights: &[f64], total: f64) -> (f64, f64) {
    let mut sum = 0.0;
    for (v, w) in values.iter().zip(weights) {
        sum += w * v;
    }
    if values.is_empty() {
        return (sum / total, 0.0);
    }
    // Entries in value order (ties: entry order). The key orders exactly as
    // `f64::total_cmp`, and with the index it is a total order. Instead of sorting every
    // entry, keys fall into BUCKETS equal slices of their range (bucket order = key order);
    // bucket weights locate the bucket where the running weight reaches 95 %, and only that
    // bucket's entries are sorted and walked. With integer weights (pixel counts) every sum
    // is exact, so the result is the one a full sort and walk gives.
    const BUCKETS: usize = 1 << 16;
    let key = |v: f64| {
        let b = v.to_bits() as i64;
        b ^ (((b >> 63) as u64) >> 1) as i64
    };
    // Least and greatest key, and the value with the greatest key (the answer when the
    // weights never reach 95 %: the last entry in value order).
    let (lo, hi, top) = values
        .iter()
        .fold((i64::MAX, i64::MIN, 0.0), |(lo, hi, top), &v| {
            let k = key(v);
            (lo.min(k), hi.max(k), if k > hi { v } else { top })
        });
    let span = (hi as i128 - lo as i128) as u128 + 1;
    let bucket = |k: i64| ((k as i128 - lo as i128) as u128 * BUCKETS as u128 / span) as usize;
    let mut mass = vec![0.0f64; BUCKETS];
    for (&v, &w) in values.iter().zip(weights) {
        mass[bucket(key(v))] += w;
    }
    let need = 0.95 * weights.iter().sum::<f64>();
    let mut cum = 0.0;
    let mut p95 = top;
    for (b, &m) in mass.iter().enumerate() {
        if cum + m < need {
            cum += m;
            continue;
        }
        let mut order: Vec<(i64, usize)> = values
            .iter()
            .enumerate()
            .filter(|(_, &v)| bucket(key(v)) == b)
            .map(|(i, &v)| (key(v), i))
            .collect();
        order.sort_unstable();
        let mut found = false;
        for &(_, i) in &order {
            cum += weights[i];
            if cum >= need {
                p95 = values[i];
                found = true;
                break;
            }
        }
        if found {
            break;
        }
    }
    (sum / total, p95)
}

/// Outcome of a search for the smallest K meeting a target.
#[derive(Debug, Clone)]
pub struct TargetSearch {
    /// The model at the chosen K.
    pub model: KMeansModel,
    /// (K, mean ΔE2000, 95th-percentile ΔE2000) of every K tried, in order.
    pub tried: Vec<(usize, f64, f64)>,
    /// Whether the chosen K meets the target (false: none up to k_max did).
    pub met: bool,
}

/// Searches K = 1, 2, … along the warm-started path of [`crate::cluster::k_path`] for
/// the smallest K whose ΔE2000 statistic is at most the target.
pub fn search_k(
    data: &Dataset,
    labs: &[[f64; 3]],
    total: f64,
    space: Space,
    params: &ValidParams,
    target: &QualityTarget,
) -> Result<TargetSearch> {
    let weights: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    let mut tried = Vec::new();
    let mut last: Option<(usize, crate::cluster::LloydResult)> = None;
    let mut met = false;
    crate::cluster::k_path(
        data,
        1,
        target.k_max,
        params.seed,
        crate::cluster::stop_rule(params),
        params.accelerate,
        |k, res| {
            let de = entry_delta_e2000(&res.means, &res.labels, labs, space);
            let (mean, p95) = mean_and_p95(&de, &weights, total);
            tried.push((k, mean, p95));
            last = Some((k, res.clone()));
            let value = match target.statistic {
                TargetStatistic::Mean => mean,
                TargetStatistic::P95 => p95,
            };
            met = value <= target.delta_e;
            !met
        },
    );
    let (k, hard) = last.ok_or_else(|| Error::Data("no colours to fit".into()))?;
    let p = KMeansParams {
        k,
        ..(**params).clone()
    }
    .check()?;
    Ok(TargetSearch {
        model: crate::cluster::finish(data, &p, 0, hard),
        tried,
        met,
    })
}

impl ReduceOptions {
    /// Defaults for `k` colours.
    pub fn new(k: usize) -> Self {
        let p = KMeansParams::new(k);
        ReduceOptions {
            k,
            mode: p.mode,
            beta: p.beta,
            space: Space::Cielab,
            seed: p.seed,
            restarts: p.restarts,
            max_iter: p.max_iter,
            tolerance: p.tolerance,
            shift_tolerance: p.shift_tolerance,
            dither: Dither::None,
            limits: Limits::default(),
            uncertainty_raw: false,
            anneal: None,
            split_merge: p.split_merge,
            target: None,
            objective: Objective::Families,
            pinned: Vec::new(),
        }
    }

    /// The clustering parameters these options imply.
    pub fn kmeans_params(&self) -> KMeansParams {
        KMeansParams::new(self.k)
            .mode(self.mode)
            .beta(self.beta)
            .seed(self.seed)
            .restarts(self.restarts)
            .max_iter(self.max_iter)
            .tolerance(self.tolerance)
            .shift_tolerance(self.shift_tolerance)
            .anneal(self.anneal)
            .split_merge(self.split_merge)
            .pinned(
                self.pinned
                    .iter()
                    .flat_map(|&c| colour::linear_to_space(colour::srgb8_to_linear(c), self.space))
                    .collect(),
            )
    }
}

/// One palette colour in the palette document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PaletteColour {
    /// Position in the palette (also the index in the indexed PNG).
    pub index: usize,
    /// `#rrggbb`, the sRGB colour written to the reduced image.
    pub hex: String,
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
    pub tool_version: String,
    /// Input file name, when there was one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input: Option<String>,
    pub space: Space,
    pub mode: Mode,
    /// Colours actually returned.
    pub k: usize,
    /// β used (1/ΔE*ab² in CIELAB, 1/OKLab-unit² in OKLab); null when infinite
    /// (every colour sits on a palette mean).
    pub beta: Option<f64>,
    pub seed: u64,
    pub iterations: usize,
    /// k-means objective: Σ over clustered pixels of the squared distance, in the
    /// clustering space, to the nearest final mean (scikit-learn's `inertia_`).
    pub sse: f64,
    /// Mean CIE76 ΔE*ab between each source pixel and its reduced pixel.
    pub mean_delta_e76: f64,
    /// Mean CIEDE2000 between each source pixel and its reduced pixel.
    pub mean_delta_e2000: f64,
    pub colors: Vec<PaletteColour>,
    /// Areas of the image (at least 0.1 % of the opaque pixels or 400 pixels) whose every
    /// pixel is more than ΔE2000 10 from its palette colour: what the palette lost.
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
}

/// Identity of an input file for resuming: byte size and modification time.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SourceStamp {
    pub bytes: u64,
    /// Modification time, nanoseconds since the Unix epoch.
    pub modified_ns: u128,
}

impl SourceStamp {
    /// The stamp of a file now.
    pub fn of(path: &Path) -> Option<SourceStamp> {
        let m = std::fs::metadata(path).ok()?;
        let modified_ns = m
            .modified()
            .ok()?
            .duration_since(std::time::UNIX_EPOCH)
            .ok()?
            .as_nanos();
        Some(SourceStamp {
            bytes: m.len(),
            modified_ns,
        })
    }
}

/// FNV-1a, 64 bits: a small, stable hash for fingerprints and checksums.
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut h = 0xcbf2_9ce4_8422_2325u64;
    for &b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

impl ReduceOptions {
    /// Fingerprint of the settings that shape the outputs (and of a fixed palette, if any).
    pub fn fingerprint(&self, fixed: Option<&FixedPalette>) -> String {
        let text = format!(
            "{}|{}|{:?}|{:?}|{}|{}|{}|{}|{}|{}|{}|{}|{:?}|{:?}|{:?}",
            crate::TOOL_VERSION,
            self.k,
            self.mode,
            self.beta,
            self.space.name(),
            self.seed,
            self.restarts,
            self.max_iter,
            self.tolerance,
            self.shift_tolerance,
            self.dither.name(),
            self.uncertainty_raw,
            fixed.map(|f| (f.colours.clone(), f.beta)),
            self.anneal,
            self.target,
        );
        // Added after the fields above, only when used, so earlier fingerprints still hold.
        let text = if self.split_merge > 0 && self.anneal.is_none() {
            format!("{text}|split-merge {}", self.split_merge)
        } else {
            text
        };
        let text = format!(
            "{text}|objective {}|pinned {:?}",
            self.objective.name(),
            self.pinned
        );
        format!("{:016x}", fnv1a(text.as_bytes()))
    }
}

/// An image reduced in memory, ready to be written.
#[derive(Debug, Clone)]
pub struct Reduction {
    pub width: u32,
    pub height: u32,
    /// Palette colours, most used first.
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
}

/// Features of each histogram entry in `space` (f32 rows) and CIELAB (for ΔE).
pub fn entry_features(h: &histogram::Histogram, space: Space) -> (Vec<f32>, Vec<[f64; 3]>) {
    let per: Vec<([f32; 3], [f64; 3])> = h
        .colours
        .par_iter()
        .with_min_len(4096)
        .map(|c| {
            let lin = h.linear(c);
            let lab = colour::linear_to_lab(lin);
            let f = match space {
                Space::Cielab => lab,
                Space::Oklab => colour::linear_to_oklab(lin),
            };
            ([f[0] as f32, f[1] as f32, f[2] as f32], lab)
        })
        .collect();
    let mut rows = Vec::with_capacity(per.len() * 3);
    let mut labs = Vec::with_capacity(per.len());
    for (f, l) in per {
        rows.extend_from_slice(&f);
        labs.push(l);
    }
    (rows, labs)
}

/// A palette given in advance (from a palette document): its colours and, optionally,
/// the β to use for the uncertainty map (default: automatic for the image at hand).
#[derive(Debug, Clone, PartialEq)]
pub struct FixedPalette {
    pub colours: Vec<[u8; 3]>,
    pub beta: Option<f64>,
    /// The space the palette was chosen in: pixels are mapped to it there.
    pub space: Space,
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
        Ok(FixedPalette {
            colours,
            beta: doc.beta,
            space: doc.space,
        })
    }
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
    let IndexedHistogram {
        histogram: hist,
        pixel_entry,
    } = match &img.pixels {
        Pixels::Rgba8(p) => histogram::from_rgba8(p),
        Pixels::Rgba16(p) => histogram::from_rgba16(p),
    };
    ph.mark("histogram");
    let alpha = if img.has_alpha {
        let a = img.alpha8();
        a.iter().any(|&v| v != 255).then_some(a)
    } else {
        None
    };
    let mut red = reduce_indexed(
        &hist,
        pixel_entry,
        img.width,
        img.height,
        alpha,
        opts,
        fixed,
    )?;
    if img.more_frames {
        red.notes.push(MORE_FRAMES_NOTE.into());
    }
    Ok(red)
}

/// The note for a file with more frames or pages than the first.
pub const MORE_FRAMES_NOTE: &str =
    "the file holds more frames or pages than the first; only the first was used";

/// Fits a palette to a (possibly merged) histogram without an image: the palette document
/// of the whole set, as written by `learn` and `batch --shared`.
pub fn learn_palette(hist: &histogram::Histogram, opts: &ReduceOptions) -> Result<PaletteDocument> {
    let opts = ReduceOptions {
        dither: Dither::None,
        ..opts.clone()
    };
    Ok(reduce_indexed(hist, Vec::new(), 0, 0, None, &opts, None)?.document)
}

/// The shared core: per-entry clustering (or mapping), rendering and scores.
fn reduce_indexed(
    hist: &histogram::Histogram,
    pixel_entry: Vec<u32>,
    width: u32,
    height: u32,
    alpha: Option<Vec<u8>>,
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
) -> Result<Reduction> {
    // A given palette is applied in the space it was chosen in.
    let palette_space;
    let opts = match fixed {
        Some(fp) if fp.space != opts.space => {
            palette_space = ReduceOptions {
                space: fp.space,
                ..opts.clone()
            };
            &palette_space
        }
        _ => opts,
    };
    let params = opts.kmeans_params().check()?;
    let mut ph = crate::trace::Phases::start("reduce");
    if hist.is_empty() {
        return Err(Error::Data(
            "every pixel is fully transparent; there is nothing to reduce".into(),
        ));
    }
    let weights = hist.weights();
    let (rows, labs) = entry_features(hist, opts.space);
    ph.mark("features");
    let data = Dataset::new(&rows, 3, Some(&weights))?;
    let mut notes = Vec::new();
    let mut warnings = Vec::new();
    let mut family_moves = 0;
    if !opts.pinned.is_empty() {
        if opts.target.is_some() && fixed.is_none() {
            return Err(Error::Params(crate::error::ParamsError::BadPinned(
                "pinned colours cannot be combined with a colour-difference target".into(),
            )));
        }
        if opts.pinned.len() > opts.k && fixed.is_none() {
            return Err(Error::Params(crate::error::ParamsError::BadPinned(
                format!(
                    "{} colours pinned but k is {}; pinned colours count toward k",
                    opts.pinned.len(),
                    opts.k
                ),
            )));
        }
        if fixed.is_some() {
            notes.push(
                "a given palette is used as it is, so the pinned colours have no effect".into(),
            );
        } else if opts.anneal.is_some() || opts.split_merge > 0 {
            notes.push(
                "with pinned colours every start extends the pins by k-means++, so the \
                 annealing and split-and-merge settings have no effect"
                    .into(),
            );
        }
    }

    // Means in the clustering space, their β, SSE, iterations and per-entry results.
    let (means, beta, sse, iterations, labels, entropy) = if let Some(fp) = fixed {
        let means: Vec<f64> = fp
            .colours
            .iter()
            .flat_map(|&c| colour::linear_to_space(colour::srgb8_to_linear(c), opts.space))
            .collect();
        let m32: Vec<f32> = means.iter().map(|&v| v as f32).collect();
        let (_, sse) = crate::cluster::assign_nearest(&data, &m32);
        let beta = match opts.beta {
            Beta::Fixed(b) => Some(b),
            Beta::Auto => fp
                .beta
                .or_else(|| crate::cluster::auto_beta(sse, data.total_weight(), 3)),
        };
        let a = crate::cluster::soft_assign(&data, &means, beta);
        (means, beta, sse, 0, a.labels, a.entropy)
    } else if let Some(target) = opts.target.as_ref().filter(|_| hist.len() > 1) {
        target.check()?;
        let unused: Vec<&str> = [
            (opts.anneal.is_some(), "--anneal"),
            (opts.split_merge > 0, "--split-merge"),
            (opts.restarts > 1, "--restarts"),
        ]
        .into_iter()
        .filter_map(|(set, name)| set.then_some(name))
        .collect();
        if !unused.is_empty() {
            notes.push(format!(
                "the K search follows one warm-started path of K (the sweep's), so {} have \
                 no effect with a ΔE2000 target",
                unused.join(", ")
            ));
        }
        let search = search_k(
            &data,
            &labs,
            hist.total() as f64,
            opts.space,
            &params,
            target,
        )?;
        let (k, mean, p95) = *search.tried.last().expect("at least one K tried");
        let shown = |(k, m, p): &(usize, f64, f64)| match target.statistic {
            TargetStatistic::Mean => format!("K = {k}: {m:.2}"),
            TargetStatistic::P95 => format!("K = {k}: {p:.2}"),
        };
        let before = search
            .tried
            .len()
            .checked_sub(2)
            .map(|i| format!("; {}", shown(&search.tried[i])))
            .unwrap_or_default();
        notes.push(if search.met {
            format!(
                "chose K = {k}, the smallest K whose {} ΔE2000 is at most {} ({}{before})",
                target.statistic.name(),
                target.delta_e,
                shown(&(k, mean, p95)),
            )
        } else {
            format!(
                "no K up to {} has a {} ΔE2000 of at most {}; using K = {k} ({})",
                target.k_max,
                target.statistic.name(),
                target.delta_e,
                shown(&(k, mean, p95)),
            )
        });
        let model = search.model;
        ph.mark("fit");
        let a = model.assign(&data);
        (
            model.means.clone(),
            model.beta,
            model.sse,
            model.iterations(),
            a.labels,
            a.entropy,
        )
    } else if hist.len() <= opts.k && opts.pinned.is_empty() {
        if hist.len() < opts.k {
            notes.push(format!(
                "the image has only {} distinct colours; returning them all instead of {}",
                hist.len(),
                opts.k
            ));
        }
        let means: Vec<f64> = rows.iter().map(|&v| v as f64).collect();
        let labels: Vec<u32> = (0..hist.len() as u32).collect();
        (means, None, 0.0, 0, labels, vec![0.0f32; hist.len()])
    } else {
        let (restart, mut hard) = fit_hard(&data, &params)?;
        ph.mark("fit");
        if opts.objective == Objective::Families {
            let pinned = params.pinned.len() / 3;
            // With an image, families are judged on its pixels; a histogram alone
            // (learn) is judged by its colours.
            let image = (!pixel_entry.is_empty()).then_some(families::ImageEntries {
                width,
                height,
                pixel_entry: &pixel_entry,
            });
            if let Some(kept) = families::keep_families(
                &data,
                &labs,
                opts.space,
                image,
                &hard,
                pinned,
                stop_rule(&params),
                params.accelerate,
            ) {
                notes.push(format!(
                    "moved {} palette colour{} to keep distinct colour families that plain \
                     k-means merged into a neighbour (families more than ΔE2000 6 from the \
                     palette: {} before, {} after)",
                    kept.moves,
                    if kept.moves == 1 { "" } else { "s" },
                    kept.lost_before,
                    kept.lost_after,
                ));
                family_moves = kept.moves;
                hard = kept.hard;
            }
            ph.mark("families");
        }
        let model = finish(&data, &params, restart, hard);
        let a = model.assign(&data);
        (
            model.means.clone(),
            model.beta,
            model.sse,
            model.iterations(),
            a.labels,
            a.entropy,
        )
    };

    ph.mark("assign");
    // Quantise the means to sRGB8; clusters that land on the same colour share a slot.
    let k_means = means.len() / 3;
    let mut slot_of_colour: HashMap<[u8; 3], u16> = HashMap::new();
    let mut slots: Vec<[u8; 3]> = Vec::new();
    let cluster_slot: Vec<u16> = (0..k_means)
        .map(|j| {
            let c = colour::space_to_srgb8(
                [means[j * 3], means[j * 3 + 1], means[j * 3 + 2]],
                opts.space,
            );
            *slot_of_colour.entry(c).or_insert_with(|| {
                slots.push(c);
                (slots.len() - 1) as u16
            })
        })
        .collect();
    let slot_lab: Vec<[f64; 3]> = slots.iter().map(|&c| colour::srgb8_to_lab(c)).collect();
    let slot_feat: Vec<f32> = slots
        .iter()
        .flat_map(|&c| {
            let f = colour::linear_to_space(colour::srgb8_to_linear(c), opts.space);
            [f[0] as f32, f[1] as f32, f[2] as f32]
        })
        .collect();
    let entry_slot: Vec<u16> = labels.iter().map(|&l| cluster_slot[l as usize]).collect();

    let pixel_slot = match opts.dither {
        Dither::None => render::remap(&pixel_entry, &entry_slot),
        Dither::FloydSteinberg => {
            render::dither_floyd_steinberg(width as usize, &pixel_entry, &rows, &slot_feat, 3)
        }
    };

    // Per-slot statistics, summed in a fixed order.
    let n_slots = slots.len();
    let mut pixels = vec![0u64; n_slots];
    let mut unc_sum = vec![0.0f64; n_slots];
    // Each entry's CIEDE2000 to its own palette colour (before dithering), for the
    // lost-area report; the undithered scores below compute it anyway.
    let mut entry_error: Vec<f64> = Vec::new();
    let (de76, de2000) = match opts.dither {
        Dither::None => {
            let per_entry: Vec<(f64, f64)> = (0..hist.len())
                .into_par_iter()
                .with_min_len(4096)
                .map(|e| {
                    let s = entry_slot[e] as usize;
                    (
                        colour::delta_e76(labs[e], slot_lab[s]),
                        colour::delta_e2000(labs[e], slot_lab[s]),
                    )
                })
                .collect();
            let (mut a, mut b) = (0.0, 0.0);
            for (e, (d76, d00)) in per_entry.iter().enumerate() {
                let w = weights[e];
                let s = entry_slot[e] as usize;
                pixels[s] += hist.counts[e];
                unc_sum[s] += w * entropy[e] as f64;
                a += w * d76;
                b += w * d00;
            }
            if !pixel_entry.is_empty() {
                entry_error = per_entry.iter().map(|p| p.1).collect();
            }
            (a, b)
        }
        Dither::FloydSteinberg => {
            let parts: Vec<(Vec<u64>, Vec<f64>, f64, f64)> = pixel_entry
                .par_chunks(1 << 16)
                .zip(pixel_slot.par_chunks(1 << 16))
                .map(|(es, ss)| {
                    let mut px = vec![0u64; n_slots];
                    let mut un = vec![0.0f64; n_slots];
                    let (mut a, mut b) = (0.0, 0.0);
                    for (&e, &s) in es.iter().zip(ss) {
                        if s == NO_INDEX {
                            continue;
                        }
                        let (e, s) = (e as usize, s as usize);
                        px[s] += 1;
                        un[s] += entropy[e] as f64;
                        a += colour::delta_e76(labs[e], slot_lab[s]);
                        b += colour::delta_e2000(labs[e], slot_lab[s]);
                    }
                    (px, un, a, b)
                })
                .collect();
            let (mut a, mut b) = (0.0, 0.0);
            for (px, un, pa, pb) in parts {
                for s in 0..n_slots {
                    pixels[s] += px[s];
                    unc_sum[s] += un[s];
                }
                a += pa;
                b += pb;
            }
            (a, b)
        }
    };
    let total = hist.total() as f64;
    ph.mark("render and scores");

    // Order: most pixels first (ties: earlier slot); unused slots are dropped, except the
    // pinned colours (the first clusters of a fit), which are always in the palette.
    let pinned_slots: Vec<usize> = if fixed.is_none() && opts.target.is_none() {
        cluster_slot
            .iter()
            .take(opts.pinned.len())
            .map(|&s| s as usize)
            .collect()
    } else {
        Vec::new()
    };
    let mut order: Vec<usize> = (0..n_slots)
        .filter(|&s| pixels[s] > 0 || pinned_slots.contains(&s))
        .collect();
    order.sort_by(|&a, &b| pixels[b].cmp(&pixels[a]).then(a.cmp(&b)));
    let mut new_index = vec![NO_INDEX; n_slots];
    for (i, &s) in order.iter().enumerate() {
        new_index[s] = i as u16;
    }
    let pixel_index: Vec<u16> = pixel_slot
        .par_iter()
        .with_min_len(1 << 14)
        .map(|&s| {
            if s == NO_INDEX {
                NO_INDEX
            } else {
                new_index[s as usize]
            }
        })
        .collect();
    let palette: Vec<[u8; 3]> = order.iter().map(|&s| slots[s]).collect();
    let colors: Vec<PaletteColour> = order
        .iter()
        .enumerate()
        .map(|(i, &s)| PaletteColour {
            index: i,
            hex: colour::hex(slots[s]),
            lab: slot_lab[s],
            pixels: pixels[s],
            share: pixels[s] as f64 / total,
            mean_uncertainty: if pixels[s] > 0 {
                unc_sum[s] / pixels[s] as f64
            } else {
                0.0
            },
        })
        .collect();
    // What the palette lost: areas far from the palette colour of their entries (each
    // entry's own colour, before any dithering).
    let lost_areas = if pixel_entry.is_empty() {
        Vec::new()
    } else {
        if entry_error.is_empty() {
            entry_error = (0..hist.len())
                .into_par_iter()
                .with_min_len(4096)
                .map(|e| colour::delta_e2000(labs[e], slot_lab[entry_slot[e] as usize]))
                .collect();
        }
        families::lost_areas(
            width,
            height,
            &pixel_entry,
            &entry_error,
            &pixel_index,
            &labs,
            &palette,
        )
    };
    warnings.extend(families::lost_areas_warning(&lost_areas));
    ph.mark("lost areas");

    // Say so when the palette holds fewer colours than asked for although the image has
    // more: means that collapsed together (a very small β pulls every soft mean to the
    // centre) or that round to one sRGB colour.
    if fixed.is_none()
        && opts.target.is_none()
        && palette.len() < opts.k
        && hist.len() > palette.len()
    {
        notes.push(format!(
            "the palette has {} colours, not the {} asked for: the means came together or \
             round to the same sRGB colour{}",
            palette.len(),
            opts.k,
            match (opts.mode, opts.beta) {
                (Mode::Soft, Beta::Fixed(_)) => " (try a larger --beta or --beta auto)",
                _ => "",
            }
        ));
    }
    if fixed.is_none() && opts.mode == Mode::Soft && beta.is_none() {
        notes.push(
            "every colour sits on a palette mean, so soft mode gives the hard result here \
             (beta is null and the uncertainty is 0)"
                .into(),
        );
    }
    let document = PaletteDocument {
        tool_version: crate::TOOL_VERSION.to_string(),
        input: None,
        space: opts.space,
        mode: opts.mode,
        k: palette.len(),
        beta,
        seed: opts.seed,
        iterations,
        sse,
        mean_delta_e76: de76 / total,
        mean_delta_e2000: de2000 / total,
        colors,
        lost_areas,
        settings: ReduceSettings {
            k_requested: opts.k,
            beta_setting: match opts.beta {
                Beta::Auto => "auto".into(),
                Beta::Fixed(b) => b.to_string(),
            },
            restarts: opts.restarts,
            max_iter: opts.max_iter,
            tolerance: opts.tolerance,
            shift_tolerance: opts.shift_tolerance,
            dither: opts.dither.name().into(),
            anneal: opts.anneal.map(|a| AnnealSetting {
                start: a.start,
                end: a.end,
                factor: a.factor,
                max_moves: a.split_merge,
            }),
            target: opts.target,
            // Recorded only where it acted: after k-means++ starts, not with annealing
            // (which records its own), a ΔE2000 target's K path, or a fixed palette.
            split_merge: if opts.anneal.is_none() && opts.target.is_none() && fixed.is_none() {
                opts.split_merge
            } else {
                0
            },
            objective: opts.objective,
            family_moves,
            pinned: if fixed.is_none() {
                opts.pinned.iter().map(|&c| colour::hex(c)).collect()
            } else {
                Vec::new()
            },
        },
        source: None,
        settings_fingerprint: None,
    };
    Ok(Reduction {
        width,
        height,
        palette,
        pixel_index,
        alpha,
        pixel_entry,
        entry_uncertainty: entropy,
        document,
        notes,
        warnings,
    })
}

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

/// The palette rows as CSV with a header.
pub fn palette_csv(doc: &PaletteDocument) -> String {
    let mut s = String::from("index,hex,L,a,b,pixels,share,mean_uncertainty\n");
    for c in &doc.colors {
        s.push_str(&format!(
            "{},{},{:.4},{:.4},{:.4},{},{:.6},{:.6}\n",
            c.index, c.hex, c.lab[0], c.lab[1], c.lab[2], c.pixels, c.share, c.mean_uncertainty
        ));
    }
    s
}

/// Encodes the reduced image: indexed PNG when the palette (plus one transparent entry
/// if needed) fits in 256 entries and alpha is only 0 or 255; RGBA PNG otherwise.
pub fn encode_reduced(red: &Reduction, w: &mut impl std::io::Write) -> std::io::Result<()> {
    let binary_alpha = red
        .alpha
        .as_ref()
        .is_none_or(|a| a.iter().all(|&v| v == 0 || v == 255));
    let has_transparent = red.pixel_index.contains(&NO_INDEX);
    let entries = red.palette.len() + has_transparent as usize;
    if binary_alpha && entries <= 256 {
        let t = red.palette.len() as u16;
        let mut pal = red.palette.clone();
        if has_transparent {
            pal.push([0, 0, 0]);
        }
        let idx: Vec<u8> = red
            .pixel_index
            .iter()
            .map(|&i| if i == NO_INDEX { t as u8 } else { i as u8 })
            .collect();
        raster::write_indexed_png(
            w,
            red.width,
            red.height,
            &pal,
            has_transparent.then_some(t as u8),
            &idx,
        )
    } else {
        let mut rgba = vec![0u8; red.pixel_index.len() * 4];
        rgba.par_chunks_mut(4).enumerate().for_each(|(p, px)| {
            let i = red.pixel_index[p];
            if i != NO_INDEX {
                let c = red.palette[i as usize];
                px[..3].copy_from_slice(&c);
                px[3] = red.alpha.as_ref().map_or(255, |a| a[p]);
            }
        });
        raster::write_rgba_png(w, red.width, red.height, &rgba)
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
                "--stdout takes reduced, uncertainty or palette (got '{s}')"
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

/// The file name without its extension, used to name outputs.
/// A file name that is not valid UTF-8 gives an output name with each invalid sequence
/// replaced by U+FFFD (the input itself is still read under its own name).
pub fn stem_of(input: &Path) -> Result<String> {
    input
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .filter(|s| !s.is_empty())
        .ok_or_else(|| Error::output(input, "cannot derive an output name from this file name"))
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
    reduce_file_with(input, out_dir, opts, None, false, &[])
}

/// As [`reduce_file`], mapping onto `fixed` colours when given (the `apply` workflow).
/// With `stamp`, the palette document records the input's size and time and the settings
/// fingerprint, so a batch can tell later whether the outputs are up to date. No output
/// may replace a file in `spare`.
pub fn reduce_file_with(
    input: &Path,
    out_dir: &Path,
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
    stamp: bool,
    spare: &[&Path],
) -> Result<ReduceReport> {
    opts.kmeans_params().check()?;
    reduce_file_as(input, &stem_of(input)?, out_dir, opts, fixed, stamp, spare)
}

/// As [`reduce_file_with`], naming the outputs `{stem}.reduced.png` and so on (a batch
/// names two images of one folder that share a file stem by their whole file names).
/// No output may replace `input` or any file in `spare` (the palette document of `apply`).
pub fn reduce_file_as(
    input: &Path,
    stem: &str,
    out_dir: &Path,
    opts: &ReduceOptions,
    fixed: Option<&FixedPalette>,
    stamp: bool,
    spare: &[&Path],
) -> Result<ReduceReport> {
    let t0 = Instant::now();
    let mut ph = crate::trace::Phases::start("reduce file");
    opts.kmeans_params().check()?;
    let img = raster::decode(input, &opts.limits)?;
    ph.mark("decode");
    let mut set = OutputSet::prepare(
        out_dir,
        &std::iter::once(input)
            .chain(spare.iter().copied())
            .collect::<Vec<_>>(),
    )?;
    for name in output_names(stem) {
        set.check_target(&name)?;
    }
    let mut red = reduce_image_with(&img, opts, fixed).map_err(|e| match e {
        Error::Data(message) => Error::InputData {
            path: input.into(),
            message,
        },
        other => other,
    })?;
    drop(img);
    red.document.input = input.file_name().map(|n| n.to_string_lossy().into_owned());
    if stamp {
        red.document.source = SourceStamp::of(input);
        red.document.settings_fingerprint = Some(opts.fingerprint(fixed));
    }
    ph.mark("reduce in memory");
    write_reduction(&red, stem, &mut set, opts.uncertainty_raw)?;
    ph.mark("encode and write");
    let outputs = set.commit()?;
    ph.mark("rename into place");
    Ok(ReduceReport {
        input: input.into(),
        outputs,
        document: red.document,
        notes: red.notes,
        warnings: red.warnings,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The weighted 95th percentile by its definition: for each candidate value, the
    /// weight of entries at or below it; the smallest value reaching 95 % of the total.
    fn p95_by_definition(values: &[f64], weights: &[f64]) -> f64 {
        let need = 0.95 * weights.iter().sum::<f64>();
        let mut cands: Vec<f64> = values.to_vec();
        cands.sort_by(f64::total_cmp);
        for c in cands {
            let below: f64 = values
                .iter()
                .zip(weights)
                .filter(|(v, _)| v.total_cmp(&c).is_le())
                .map(|(_, w)| w)
                .sum();
            if below >= need {
                return c;
            }
        }
        f64::NAN
    }

    #[test]
    fn fingerprint_tells_split_merge_settings_apart() {
        let base = ReduceOptions::new(8);
        let with = |n: usize| ReduceOptions {
            split_merge: n,
            ..base.clone()
        };
        assert_eq!(with(0).fingerprint(None), base.fingerprint(None));
        assert_ne!(with(8).fingerprint(None), base.fingerprint(None));
        assert_ne!(with(8).fingerprint(None), with(16).fingerprint(None));
        let annealed = |n: usize| ReduceOptions {
            anneal: Some(Anneal {
                split_merge: n,
                ..Anneal::default()
            }),
            ..base.clone()
        };
        assert_ne!(
            annealed(32).fingerprint(None),
            annealed(0).fingerprint(None)
        );
        assert_ne!(annealed(32).fingerprint(None), base.fingerprint(None));
    }

    #[test]
    fn weighted_p95_follows_its_definition_with_ties() {
        let mut r = crate::rng::Rng::new(3, 0);
        for n in [1usize, 2, 5, 40, 301] {
            // Values on a coarse grid so that many tie; integer weights so sums are exact.
            let values: Vec<f64> = (0..n).map(|_| r.below(7) as f64 * 0.5).collect();
            let weights: Vec<f64> = (0..n).map(|_| 1.0 + r.below(9) as f64).collect();
            let total: f64 = weights.iter().sum();
            let (mean, p95) = mean_and_p95(&values, &weights, total);
            assert_eq!(p95, p95_by_definition(&values, &weights), "n = {n}");
            let m: f64 = values.iter().zip(&weights).map(|(v, w)| v * w).sum::<f64>() / total;
            assert!((mean - m).abs() <= 1e-12 * m.abs().max(1.0));
        }
        // Continuous values over a wide range (many occupied buckets, negatives, a few
        // exact repeats, zero weights) against the definition.
        for n in [3usize, 1000, 3000] {
            let values: Vec<f64> = (0..n)
                .map(|i| {
                    if i % 97 == 0 {
                        2.5
                    } else {
                        (r.uniform() - 0.1) * 10f64.powi(r.below(5) as i32)
                    }
                })
                .collect();
            let weights: Vec<f64> = (0..n).map(|_| r.below(6) as f64).collect();
            let total: f64 = weights.iter().sum::<f64>().max(1.0);
            let (_, p95) = mean_and_p95(&values, &weights, total);
            assert_eq!(p95, p95_by_definition(&values, &weights), "n = {n}");
        }
    }
}
