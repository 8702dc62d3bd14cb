//! The flags of each command, as typed, and their resolution into library options.

use super::engine::{BetaFlag, EngineFlags, FolderOutput, LimitFlag, SceneFlags};
use crate::colour::Space;
use crate::features::quality::{QualityTarget, TargetStatistic};
use crate::limits::Limits;
use crate::reduce::ReduceOptions;
use crate::render::Dither;
use clap::Args;
use std::path::PathBuf;

/// How a palette is chosen: shared by `reduce`, `batch` and `learn`.
#[derive(Debug, Args, Clone, PartialEq)]
pub struct PaletteFlags {
    /// Number of colours (at least 1). Fewer are returned if the image has fewer distinct colours.
    #[arg(short = 'k', long = "k", default_value_t = 8, value_name = "K")]
    pub k: usize,

    /// Space the colours are chosen in.
    #[arg(long, default_value = "cielab", value_name = "cielab|oklab")]
    pub space: Space,

    /// Choose K instead of giving it: the smallest K (up to --k-max) whose mean CIEDE2000
    /// between source and reduced pixels is at most this. Rules of thumb (common
    /// practice, not a standard): about 1 is where a trained observer starts to notice,
    /// 2 to 3 a usual commercial print tolerance.
    #[arg(long = "target-delta-e", value_name = "ΔE2000", conflicts_with = "k")]
    pub target_delta_e: Option<f64>,

    /// With --target-delta-e: bound the 95th percentile of the per-pixel ΔE2000 instead
    /// of the mean.
    #[arg(long = "target-p95", requires = "target_delta_e")]
    pub target_p95: bool,

    /// With --target-delta-e: the largest K tried.
    #[arg(long = "k-max", default_value_t = 16, value_name = "K", requires = "target_delta_e")]
    pub k_max: usize,

    /// How colours are chosen. `families` (default): k-means, then every distinct colour
    /// family the palette would lose (a small shape in a colour unlike its surroundings,
    /// at least 0.1 % of the pixels or 400 pixels) is brought back in place of the least
    /// needed colour, such as one of two near-duplicates in a smooth area. `plain`: plain
    /// k-means, the pixel-weighted squared error alone (the textbook objective; `sse` is accepted too).
    #[arg(long, default_value = "families", value_name = "families|plain")]
    pub objective: crate::families::Objective,

    /// A colour the palette must hold exactly: `#rrggbb`, or CIELAB as `L,a,b`
    /// (e.g. `--pin '#d62828' --pin 95,0,0`). Repeat for more; pinned colours count
    /// toward -k and never move.
    #[arg(long = "pin", value_name = "COLOUR", value_parser = crate::families::parse_colour, conflicts_with = "target_delta_e")]
    pub pin: Vec<[u8; 3]>,
}

/// How reduced images are written: shared by `reduce`, `batch` and `apply`.
#[derive(Debug, Args, Clone, PartialEq)]
pub struct ImageFlags {
    /// Dithering of the reduced image.
    #[arg(long, default_value = "none", value_name = "none|floyd-steinberg")]
    pub dither: Dither,

    /// Also write STEM.uncertainty.tif (32-bit float, 0..1).
    #[arg(long = "uncertainty-raw")]
    pub uncertainty_raw: bool,

    #[command(flatten)]
    pub limit: LimitFlag,
}

/// The reduction options of a palette, image and engine flag set.
fn reduce_options(
    palette: &PaletteFlags,
    image: Option<&ImageFlags>,
    engine: &EngineFlags,
    limits: Limits,
) -> ReduceOptions {
    ReduceOptions {
        k: palette.k,
        space: palette.space,
        engine: engine.options(),
        dither: image.map_or(Dither::None, |i| i.dither),
        limits,
        uncertainty_raw: image.is_some_and(|i| i.uncertainty_raw),
        target: quality_target(palette.target_delta_e, palette.target_p95, palette.k_max),
        objective: palette.objective,
        pinned: palette.pin.clone(),
    }
}

/// Flags of `reduce`.
#[derive(Debug, Args, Clone)]
pub struct ReduceArgs {
    /// Image to reduce (PNG, JPEG, TIFF, WebP, BMP, GIF; 8 or 16 bits per sample), or `-`
    /// to read it from standard input (outputs are then named stdin.*).
    pub input: PathBuf,

    #[command(flatten)]
    pub palette: PaletteFlags,

    #[command(flatten)]
    pub image: ImageFlags,

    #[command(flatten)]
    pub output: FolderOutput,

    /// Write this one output to standard output instead of files (for pipelines).
    #[arg(long, value_name = "reduced|uncertainty|palette", conflicts_with_all = ["out", "json"])]
    pub stdout: Option<crate::reduce::OneOutput>,

    #[command(flatten)]
    pub engine: EngineFlags,
}

impl ReduceArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> ReduceOptions {
        reduce_options(&self.palette, Some(&self.image), &self.engine, self.image.limit.limits())
    }
}

/// Flags of `batch`.
#[derive(Debug, Args, Clone)]
pub struct BatchArgs {
    /// Folder of images (walked recursively).
    pub input: PathBuf,

    #[command(flatten)]
    pub palette: PaletteFlags,

    #[command(flatten)]
    pub image: ImageFlags,

    /// One palette for the whole batch, fitted on the merged histograms of all images.
    #[arg(long, conflicts_with = "palette_file")]
    pub shared: bool,

    /// Map every image onto this palette document instead of fitting one per image.
    #[arg(long = "palette", id = "palette_file", value_name = "FILE")]
    pub palette_file: Option<PathBuf>,

    /// Images processed at once, 1 to 256 (default: the number of cores).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..=256))]
    pub jobs: Option<u16>,

    /// Redo images whose outputs are already up to date.
    #[arg(long)]
    pub force: bool,

    /// No progress output.
    #[arg(long, short = 'q')]
    pub quiet: bool,

    /// Also write contact-sheet.html: before and after, palette strips and ΔE2000.
    #[arg(long = "contact-sheet")]
    pub contact_sheet: bool,

    /// Output folder (must not be inside the input folder).
    #[arg(short = 'o', long = "out", value_name = "DIR")]
    pub out: PathBuf,

    /// Also print the batch report on standard output.
    #[arg(long)]
    pub json: bool,

    #[command(flatten)]
    pub engine: EngineFlags,
}

impl BatchArgs {
    /// The reduction options of each image.
    pub fn options(&self) -> ReduceOptions {
        reduce_options(&self.palette, Some(&self.image), &self.engine, self.image.limit.limits())
    }
}

/// Flags of `learn`.
#[derive(Debug, Args, Clone)]
pub struct LearnArgs {
    /// Folders, images or histogram files (from `chromasift histogram`) to learn from.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,

    #[command(flatten)]
    pub palette: PaletteFlags,

    #[command(flatten)]
    pub limit: LimitFlag,

    /// The palette document to write (`-`: standard output).
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: PathBuf,

    /// Also print the palette document on standard output.
    #[arg(long)]
    pub json: bool,

    #[command(flatten)]
    pub engine: EngineFlags,
}

impl LearnArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> ReduceOptions {
        reduce_options(&self.palette, None, &self.engine, self.limit.limits())
    }
}

/// Flags of `apply`.
#[derive(Debug, Args, Clone)]
pub struct ApplyArgs {
    /// Image to map onto the palette, or `-` for standard input.
    pub input: PathBuf,

    /// Palette document (from `learn`, `reduce` or `batch --shared`).
    #[arg(long, value_name = "FILE")]
    pub palette: PathBuf,

    #[command(flatten)]
    pub image: ImageFlags,

    /// Sharpness of the uncertainty map (default: the palette document's β, else
    /// automatic for the image at hand).
    #[command(flatten)]
    pub beta: BetaFlag,

    #[command(flatten)]
    pub output: FolderOutput,
}

impl ApplyArgs {
    /// The library options these flags ask for (the palette's colours come from its file).
    pub fn options(&self) -> ReduceOptions {
        let mut o = ReduceOptions::new(1);
        o.engine.beta = self.beta.beta;
        o.dither = self.image.dither;
        o.uncertainty_raw = self.image.uncertainty_raw;
        o.limits = self.image.limit.limits();
        o
    }
}

/// Flags of `histogram`.
#[derive(Debug, Args, Clone)]
pub struct HistogramArgs {
    /// Folders or images to summarise.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,

    /// The histogram file to write (`-`: standard output).
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: PathBuf,

    #[command(flatten)]
    pub limit: LimitFlag,

    /// Print a summary (file, pixels, distinct colours) as JSON on standard output.
    #[arg(long)]
    pub json: bool,
}

/// Flags of `separate`.
#[derive(Debug, Args, Clone)]
pub struct SeparateArgs {
    /// Artwork to separate (sRGB; PNG, JPEG, TIFF, WebP, BMP, GIF), or `-` for standard input.
    pub input: PathBuf,

    /// Ink library: CSV (name,L,a,b in CIELAB D50, or name,hex) or JSON; `-` for standard input.
    #[arg(long, value_name = "FILE")]
    pub inks: PathBuf,

    /// Number of inks to choose (inks named with --use count toward it).
    #[arg(short = 'k', long = "k", default_value_t = 4, value_name = "K")]
    pub k: usize,

    /// Inks that must be used, by name, separated by commas.
    #[arg(long = "use", value_name = "NAMES", value_delimiter = ',')]
    pub use_inks: Vec<String>,

    /// Use every ink in the library as given (no choice).
    #[arg(long, conflicts_with = "k")]
    pub all: bool,

    /// Paper or garment colour (#rrggbb): pixels nearer to it than to any ink get no ink.
    #[arg(long, value_name = "COLOUR", value_parser = parse_colour)]
    pub substrate: Option<[u8; 3]>,

    /// Smallest region (8-connected) any plate may hold, in pixels; smaller islands join
    /// the neighbour they share the longest border with.
    #[arg(long = "min-area", default_value_t = crate::separate::DEFAULT_MIN_AREA, value_name = "PX")]
    pub min_area: usize,

    /// Trap width in pixels: lighter inks spread under darker neighbours.
    #[arg(long, default_value_t = 0, value_name = "PX")]
    pub trap: u32,

    /// Print resolution in dots per inch, for areas in cm² (default: from the file).
    #[arg(long, value_name = "DPI")]
    pub dpi: Option<f64>,

    /// Choose the number of inks instead of giving it: the fewest (up to --k-max) whose
    /// mean CIEDE2000 to the artwork is at most this (rules of thumb, common practice:
    /// about 1 is noticeable to a trained observer, 2 to 3 a usual print tolerance).
    #[arg(long = "target-delta-e", value_name = "ΔE2000", conflicts_with_all = ["k", "all"])]
    pub target_delta_e: Option<f64>,

    /// With --target-delta-e: bound the 95th percentile instead of the mean.
    #[arg(long = "target-p95", requires = "target_delta_e")]
    pub target_p95: bool,

    /// With --target-delta-e: the most inks tried.
    #[arg(long = "k-max", default_value_t = 8, value_name = "K")]
    pub k_max: usize,

    /// How inks are chosen. `families` (default): the lowest total ΔE2000, then every
    /// distinct colour family of the artwork that a library ink matches (within ΔE2000 6)
    /// gets that ink, in place of an ink no family needs. `plain`: the lowest total ΔE2000
    /// alone.
    #[arg(long, default_value = "families", value_name = "families|plain")]
    pub objective: crate::families::Objective,

    #[command(flatten)]
    pub limit: LimitFlag,

    #[command(flatten)]
    pub output: FolderOutput,

    /// The engine runs the k-means start of the ink search (when the library is too large
    /// to try every set of inks).
    #[command(flatten)]
    pub engine: EngineFlags,
}

impl SeparateArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> crate::separate::SeparateOptions {
        crate::separate::SeparateOptions {
            k: self.k,
            use_inks: self
                .use_inks
                .iter()
                .map(|s| s.trim().to_string())
                .filter(|s| !s.is_empty())
                .collect(),
            all: self.all,
            substrate: self.substrate,
            min_area: self.min_area,
            trap: self.trap,
            dpi: self.dpi,
            engine: self.engine.options(),
            limits: self.limit.limits(),
            target: quality_target(self.target_delta_e, self.target_p95, self.k_max),
            objective: self.objective,
        }
    }
}

/// Flags of `landcover`.
#[derive(Debug, Args, Clone)]
pub struct LandcoverArgs {
    /// Raster: TIFF/GeoTIFF with 1-16 bands (8/16-bit, 16-bit signed, 32-bit float), or
    /// PNG/JPEG (R, G, B); `-` for standard input.
    pub input: PathBuf,

    /// Number of classes (at most 255).
    #[arg(short = 'k', long = "k", default_value_t = 6, value_name = "K")]
    pub k: usize,

    /// Refuse rasters with more pixels than this (checked from the header). Scenes are
    /// read strip by strip, so the limit is higher than for images.
    #[arg(long = "max-pixels", default_value_t = crate::landcover::MAX_SCENE_PIXELS, value_name = "N")]
    pub max_pixels: u64,

    #[command(flatten)]
    pub output: FolderOutput,

    #[command(flatten)]
    pub scene: SceneFlags,

    #[command(flatten)]
    pub engine: EngineFlags,
}

impl LandcoverArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> crate::landcover::LandcoverOptions {
        crate::landcover::LandcoverOptions {
            k: self.k,
            scene: self.scene.options(),
            engine: self.engine.options(),
            limits: Limits::with_max_pixels(self.max_pixels),
        }
    }
}

/// Flags of `sweep`.
#[derive(Debug, Args, Clone)]
pub struct SweepArgs {
    /// Colour image, or a multi-band raster (TIFF/GeoTIFF) read as `landcover` reads it;
    /// `-` for standard input.
    pub input: PathBuf,

    /// Range of K, both ends included.
    #[arg(short = 'k', long = "k", default_value = "2..16", value_name = "A..B")]
    pub k: crate::sweep::KRange,

    /// Space the colours are chosen in (colour images).
    #[arg(long, default_value = "cielab", value_name = "cielab|oklab")]
    pub space: Space,

    /// Pixels drawn (seeded) for the silhouette, which costs O(N²); 2 to 50000.
    #[arg(long = "silhouette-sample", default_value_t = 2000, value_name = "N")]
    pub silhouette_sample: usize,

    #[command(flatten)]
    pub limit: LimitFlag,

    #[command(flatten)]
    pub output: FolderOutput,

    /// Features of multi-band rasters (colour images ignore them).
    #[command(flatten)]
    pub scene: SceneFlags,

    #[command(flatten)]
    pub engine: EngineFlags,
}

impl SweepArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> crate::sweep::SweepOptions {
        crate::sweep::SweepOptions {
            range: self.k,
            space: self.space,
            engine: self.engine.options(),
            silhouette_sample: self.silhouette_sample,
            limits: self.limit.limits(),
            scene: Some(self.scene.options()),
        }
    }
}

/// Parses `#rrggbb` (the substrate colour).
pub fn parse_colour(s: &str) -> Result<[u8; 3], String> {
    crate::colour::parse_hex(s)
}

/// The `--target-delta-e`, `--target-p95` and `--k-max` flags as a quality target.
fn quality_target(delta_e: Option<f64>, p95: bool, k_max: usize) -> Option<QualityTarget> {
    delta_e.map(|delta_e| QualityTarget {
        delta_e,
        statistic: if p95 {
            TargetStatistic::P95
        } else {
            TargetStatistic::Mean
        },
        k_max,
    })
}
