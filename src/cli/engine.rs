//! Flag groups shared by several commands, each declared once: the k-means engine, the
//! scene features of multi-band rasters, the pixel limit and the output folder.

use crate::cluster::{Anneal, Beta, EngineOptions, Mode, Refine};
use crate::features::scene::{IndexSpec, Scale, SceneOptions};
use crate::limits::Limits;
use crate::rng::DEFAULT_SEED;
use clap::Args;
use std::path::PathBuf;

/// Soft-assignment sharpness (also the sharpness of every uncertainty map).
#[derive(Debug, Args, Clone, PartialEq)]
pub struct BetaFlag {
    /// Sharpness of the soft assignment in 1/(clustering unit)²: 1/ΔE*ab² for CIELAB,
    /// 1/OKLab-unit² for OKLab, 1/(scaled feature unit)² for scenes; or `auto` for 1/σ²,
    /// σ² the pooled within-cluster variance of the hard solution. In hard mode it sets
    /// only the sharpness of the uncertainty map.
    #[arg(
        long,
        default_value = "auto",
        value_name = "NUMBER|auto",
        allow_hyphen_values = true
    )]
    pub beta: Beta,
}

/// The k-means engine, the same in every command that fits clusters.
#[derive(Debug, Args, Clone, PartialEq)]
#[command(next_help_heading = "Engine")]
pub struct EngineFlags {
    /// hard: each pixel one cluster; soft: each pixel a probability over clusters,
    /// r ∝ exp(−β·½d²), started from the hard solution.
    #[arg(long, default_value = "hard", value_name = "hard|soft")]
    pub mode: Mode,

    #[command(flatten)]
    pub beta: BetaFlag,

    /// Seed of the random generator (ChaCha8) for starts and samples; same seed, same output.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,

    /// Independent starts; the one with the lowest SSE is kept.
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub restarts: usize,

    /// Most iterations of each phase (hard, then soft).
    #[arg(long = "max-iter", default_value_t = 300, value_name = "N")]
    pub max_iter: usize,

    /// Stop when an iteration changes the objective by at most this fraction.
    #[arg(long, default_value_t = 1e-6, value_name = "FRACTION")]
    pub tolerance: f64,

    /// The hard phase also stops when the means' summed squared move in one iteration is
    /// at most this times the data's mean variance per dimension (0 = off).
    #[arg(
        long = "shift-tolerance",
        default_value_t = 1e-4,
        value_name = "FRACTION"
    )]
    pub shift_tolerance: f64,

    /// Global refinement after each k-means++ start, so that the fit does not stop in the
    /// first local minimum: split-merge[:N] (default; at most N moves, each giving up the
    /// mean least needed to split the cluster that gains most, kept only if the SSE falls),
    /// swap[:N] (N trials per mean), random-swap[:N] (N trials per mean), or none (plain
    /// k-means++ and Lloyd, the textbook algorithm).
    #[arg(long, default_value_t = Refine::default(), value_name = "none|split-merge[:N]|swap[:N]|random-swap[:N]")]
    pub refine: Refine,

    /// Start from deterministic annealing (Rose, Gurewitz & Fox 1990) instead of
    /// k-means++: soft k-means with β raised geometrically from --anneal-start to
    /// --anneal-end, then split-and-merge moves (--split-merge), then a hard Lloyd polish.
    #[arg(long)]
    pub anneal: bool,

    /// First β of the annealing, as a multiple of the critical β_c = 1/λ_max (λ_max: the
    /// data's largest variance along a principal axis).
    #[arg(long = "anneal-start", default_value_t = Anneal::default().start, value_name = "MULTIPLE", requires = "anneal")]
    pub anneal_start: f64,

    /// Last β of the annealing, as a multiple of β_c.
    #[arg(long = "anneal-end", default_value_t = Anneal::default().end, value_name = "MULTIPLE", requires = "anneal")]
    pub anneal_end: f64,

    /// Ratio between successive β of the annealing (> 1).
    #[arg(long = "anneal-factor", default_value_t = Anneal::default().factor, value_name = "RATIO", requires = "anneal")]
    pub anneal_factor: f64,

    /// Most split-and-merge moves after each start (each moves one mean from where it is
    /// least needed to split the cluster that gains most, and is kept only if the SSE
    /// falls); 0 for none. Default: 32 with --anneal, 0 without.
    #[arg(long = "split-merge", value_name = "N")]
    pub split_merge: Option<usize>,
}

impl EngineFlags {
    /// The engine settings these flags ask for.
    pub fn options(&self) -> EngineOptions {
        EngineOptions {
            mode: self.mode,
            beta: self.beta.beta,
            seed: self.seed,
            restarts: self.restarts,
            max_iter: self.max_iter,
            tolerance: self.tolerance,
            shift_tolerance: self.shift_tolerance,
            refine: self.refine,
            anneal: self.anneal.then(|| Anneal {
                start: self.anneal_start,
                end: self.anneal_end,
                factor: self.anneal_factor,
                split_merge: self.split_merge.unwrap_or(Anneal::default().split_merge),
                ..Anneal::default()
            }),
            split_merge: if self.anneal {
                0
            } else {
                self.split_merge.unwrap_or(0)
            },
        }
    }
}

/// How a multi-band raster's pixels become feature rows.
#[derive(Debug, Args, Clone, PartialEq)]
#[command(next_help_heading = "Scene features")]
pub struct SceneFlags {
    /// Bands to use, 1-based, separated by commas (default: all).
    #[arg(long, value_name = "LIST")]
    pub bands: Option<BandList>,

    /// Add a normalised difference as a feature: ndvi:RED,NIR gives (NIR - Red)/(NIR + Red);
    /// nd:A,B gives (B - A)/(B + A). Repeat for several.
    #[arg(long = "index", value_name = "ndvi:RED,NIR|nd:A,B")]
    pub index: Vec<IndexSpec>,

    /// Feature scaling: zscore (each feature to mean 0, standard deviation 1) or none.
    #[arg(long, default_value = "zscore", value_name = "zscore|none")]
    pub scale: Scale,

    /// Nodata value (default: the file's GDAL_NODATA tag, if any); such pixels are left out
    /// (class 0 in class rasters).
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    pub nodata: Option<f64>,

    /// Pixels in the seeded, spatially spread fitting sample (all pixels when the scene is
    /// smaller).
    #[arg(long, default_value_t = SceneOptions::default().sample, value_name = "N", value_parser = positive_count)]
    pub sample: usize,

    /// A raster on the scene's grid (same size and georeferencing) whose non-zero pixels are
    /// left out, e.g. a cloud mask with 1 = cloud.
    #[arg(long, value_name = "MASK.tif")]
    pub exclude: Option<std::path::PathBuf>,
}

impl SceneFlags {
    /// The scene settings these flags ask for.
    pub fn options(&self) -> SceneOptions {
        SceneOptions {
            bands: self.bands.as_ref().map(|b| b.0.clone()),
            indices: self.index.clone(),
            scale: self.scale,
            nodata: self.nodata,
            sample: self.sample,
            exclude: self.exclude.clone(),
        }
    }
}

/// A band list such as `2,3,4,8` (1-based).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BandList(pub Vec<usize>);

impl std::str::FromStr for BandList {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        crate::features::scene::parse_bands(s).map(BandList)
    }
}

/// The pixel limit of commands that decode images.
#[derive(Debug, Args, Clone, PartialEq)]
pub struct LimitFlag {
    /// Refuse images with more pixels than this (checked from the header, before decoding).
    #[arg(long = "max-pixels", default_value_t = Limits::default().max_pixels, value_name = "N")]
    pub max_pixels: u64,
}

impl LimitFlag {
    pub fn limits(&self) -> Limits {
        Limits::with_max_pixels(self.max_pixels)
    }
}

/// The output folder and the document on standard output, for commands that write a set
/// of files for one input.
#[derive(Debug, Args, Clone, PartialEq)]
pub struct FolderOutput {
    /// Output folder (created if missing).
    #[arg(short = 'o', long = "out", default_value = ".", value_name = "DIR")]
    pub out: PathBuf,

    /// Also print the result document on standard output.
    #[arg(long)]
    pub json: bool,
}

/// A count of at least 1 (`--sample`).
pub(crate) fn positive_count(s: &str) -> Result<usize, String> {
    match s.parse::<usize>() {
        Ok(0) => Err("must be at least 1".into()),
        Ok(n) => Ok(n),
        Err(e) => Err(e.to_string()),
    }
}
