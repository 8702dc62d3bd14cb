//! Command-line flags (as typed) and their resolution into library options.

use crate::cluster::{Anneal, Beta, Mode};
use crate::colour::Space;
use crate::limits::Limits;
use crate::reduce::ReduceOptions;
use crate::render::Dither;
use crate::rng::DEFAULT_SEED;
use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

const REDUCE_EXAMPLES: &str = "\
Examples:
  chromasift reduce fixtures/demo/harbour-poster.png -k 6 -o out/
  chromasift reduce field.jpg -k 6 --mode soft --beta auto -o out/ --seed 3
  chromasift reduce scan.tif -k 12 --space oklab --dither floyd-steinberg --uncertainty-raw -o out/
  chromasift reduce poster.png --target-delta-e 3.0 --k-max 12 -o out/
  chromasift reduce photo.jpg -k 16 --anneal -o out/
  cat photo.png | chromasift reduce - -k 8 --stdout reduced > photo.k8.png

Writes STEM.reduced.png, STEM.palette.json, STEM.palette.csv and STEM.uncertainty.png
(plus STEM.uncertainty.tif with --uncertainty-raw) into the output folder.

Exit status: 0 success, 2 bad parameters or unreadable input (nothing is written).";

const SEPARATE_EXAMPLES: &str = "\
Examples:
  chromasift separate fixtures/demo/harbour-poster.png --inks fixtures/demo/quayside-inks.csv -k 4 -o plates/
  chromasift separate artwork.png --inks shop-inks.csv --target-delta-e 3 --k-max 6 -o plates/
  chromasift separate artwork.png --inks shop-inks.csv --use \"Night Black,Harbour Blue\" -k 3 \\
      --substrate \"#ffffff\" --min-area 24 --trap 2 -o plates/

Writes STEM.separation.json, one STEM.plate-NN-<ink>.png per ink (black = ink, lightest
ink first), STEM.proof.png and STEM.swatches.svg into the output folder.

Ink library: CSV with a header, name,L,a,b (measured CIELAB, D50) or name,hex (sRGB),
or a JSON array of objects with the same fields.

Exit status: 0 success, 2 bad parameters, library or input (nothing is written).";

const LANDCOVER_EXAMPLES: &str = "\
Examples:
  chromasift landcover scene.tif -k 6 -o classes/
  chromasift landcover scene.tif -k 8 --bands 2,3,4,8 --index ndvi:3,4 --nodata 0 --mode soft -o classes/

Writes STEM.classes.tif (class 1..K, 0 = nodata) and STEM.uncertainty.tif (0..1, -1 =
nodata), both with the input's georeferencing, plus STEM.classes.png (preview and legend),
STEM.classes.json and STEM.classes.csv.

Caution: this is an unsupervised split, not a validated land-cover classification. Class
numbers carry no meaning until someone labels them; check against ground truth before any
decision, and defer to local rules and licensed practice.

Exit status: 0 success, 2 bad parameters or unreadable input (nothing is written).";

/// Split images into a few colours or classes with perceptual k-means.
#[derive(Debug, Parser)]
#[command(
    name = "chromasift",
    version,
    about,
    propagate_version = true,
    after_help = "Exit status: 0 success; 1 some inputs of a batch failed (the rest were done); \
2 usage error or unreadable input (nothing is written); 130 a batch was interrupted.\n\
Data goes to standard output, messages to standard error. NO_COLOR turns styling off."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

/// The workflows.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Reduce an image to K colours chosen in CIELAB or OKLab, with ΔE2000 scores and an
    /// uncertainty map.
    #[command(after_help = REDUCE_EXAMPLES)]
    Reduce(ReduceArgs),

    /// Separate artwork into plates, one per ink, choosing the best K inks of a library.
    #[command(after_help = SEPARATE_EXAMPLES)]
    Separate(SeparateArgs),

    /// Split a multi-band raster (GeoTIFF, or an RGB photo) into K unsupervised classes
    /// aligned to the map, with an uncertainty map. Not a validated classification.
    #[command(after_help = LANDCOVER_EXAMPLES)]
    Landcover(LandcoverArgs),

    /// Reduce every image of a folder, each with its own palette or all with one shared palette.
    #[command(after_help = BATCH_EXAMPLES)]
    Batch(BatchArgs),

    /// Learn one palette from folders, images or histogram files, without reducing anything.
    Learn(LearnArgs),

    /// Map an image onto a given palette (nearest colour in the palette's space).
    Apply(ApplyArgs),

    /// Write the merged colour histogram of folders or images to a file, for `learn`.
    Histogram(HistogramArgs),

    /// Fit every K of a range and score each (ΔE2000, silhouette, BIC, uncertainty), to
    /// choose how many colours or classes.
    #[command(after_help = SWEEP_EXAMPLES)]
    Sweep(SweepArgs),

    /// Print a shell completion script on standard output.
    #[command(
        after_help = "Example:\n  chromasift completions bash > ~/.local/share/bash-completion/completions/chromasift"
    )]
    Completions(CompletionsArgs),

    /// Print the manual page (roff) on standard output.
    #[command(after_help = "Example:\n  chromasift manpage > chromasift.1 && man ./chromasift.1")]
    Manpage,
}

/// Flags of `completions`.
#[derive(Debug, Args, Clone)]
pub struct CompletionsArgs {
    /// Shell to write completions for.
    #[arg(value_name = "bash|zsh|fish|elvish|powershell")]
    pub shell: clap_complete::Shell,
}

const SWEEP_EXAMPLES: &str = "\
Examples:
  chromasift sweep fixtures/demo/harbour-poster.png --k 2..16 -o sweep/
  chromasift sweep scene.tif --k 3..12 --bands 1,2,3,4 -o sweep/

Writes sweep.csv, sweep.json and sweep.svg into the output folder: per K the SSE, mean
and 95th-percentile ΔE2000 and the closest pair of fitted colours (colour images), mean
uncertainty, mean silhouette on a seeded sample (Rousseeuw 1987), BIC (Schwarz 1978) of a
spherical and of a full-covariance Gaussian mixture, ICL (Biernacki, Celeux & Govaert
2000) and stability across subsamples, with the K each criterion suggests and one
recommended K with its reason. The criteria are evidence, not a verdict: look at the
reduced images too.

Exit status: 0 success, 2 bad parameters or unreadable input (nothing is written).";

/// Flags of `sweep`.
#[derive(Debug, Args, Clone)]
pub struct SweepArgs {
    /// Colour image, or a multi-band raster (TIFF/GeoTIFF) read as `landcover` reads it.
    pub input: PathBuf,

    /// Range of K, both ends included.
    #[arg(short = 'k', long = "k", default_value = "2..16", value_name = "A..B")]
    pub k: crate::sweep::KRange,

    /// Space the colours are chosen in (colour images).
    #[arg(long, default_value = "cielab", value_name = "cielab|oklab")]
    pub space: Space,

    /// Bands to use, 1-based (multi-band rasters; default: all).
    #[arg(long, value_name = "LIST")]
    pub bands: Option<BandList>,

    /// Add a normalised difference as a feature (multi-band rasters), as in `landcover`.
    #[arg(long = "index", value_name = "ndvi:RED,NIR|nd:A,B")]
    pub index: Vec<crate::landcover::IndexSpec>,

    /// Feature scaling for multi-band rasters: zscore or none.
    #[arg(long, default_value = "zscore", value_name = "zscore|none")]
    pub scale: crate::landcover::Scale,

    /// Nodata value for multi-band rasters (default: the file's GDAL_NODATA tag).
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    pub nodata: Option<f64>,

    /// Pixels in the seeded fitting sample of a multi-band raster.
    #[arg(long, default_value_t = 2_000_000, value_name = "N", value_parser = positive_count)]
    pub sample: usize,

    /// Pixels drawn (seeded) for the silhouette, which costs O(N²).
    #[arg(long = "silhouette-sample", default_value_t = 2000, value_name = "N")]
    pub silhouette_sample: usize,

    /// Seed of k-means++ and of the samples.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,

    /// Most Lloyd iterations per K.
    #[arg(long = "max-iter", default_value_t = 300, value_name = "N")]
    pub max_iter: usize,

    /// Stop when an iteration lowers the SSE by at most this fraction.
    #[arg(long, default_value_t = 1e-6, value_name = "FRACTION")]
    pub tolerance: f64,

    /// Also stop when the means' summed squared move is at most this times the data's
    /// mean variance per dimension (0 = off).
    #[arg(
        long = "shift-tolerance",
        default_value_t = 1e-4,
        value_name = "FRACTION"
    )]
    pub shift_tolerance: f64,

    /// Refuse images with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = Limits::default().max_pixels, value_name = "N")]
    pub max_pixels: u64,

    /// Output folder (created if missing).
    #[arg(short = 'o', long = "out", default_value = ".", value_name = "DIR")]
    pub out: PathBuf,

    /// Print the sweep document on standard output.
    #[arg(long)]
    pub json: bool,
}

impl SweepArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> crate::sweep::SweepOptions {
        let scene = crate::landcover::LandcoverOptions {
            bands: self.bands.as_ref().map(|b| b.0.clone()),
            indices: self.index.clone(),
            scale: self.scale,
            nodata: self.nodata,
            sample: self.sample,
            ..Default::default()
        };
        crate::sweep::SweepOptions {
            range: self.k,
            space: self.space,
            seed: self.seed,
            max_iter: self.max_iter,
            tolerance: self.tolerance,
            shift_tolerance: self.shift_tolerance,
            silhouette_sample: self.silhouette_sample,
            limits: Limits::with_max_pixels(self.max_pixels),
            scene: Some(scene),
        }
    }
}

/// Flags of `landcover`.
#[derive(Debug, Args, Clone)]
pub struct LandcoverArgs {
    /// Raster: TIFF/GeoTIFF with 1-16 bands (8/16-bit, 16-bit signed, 32-bit float), or PNG/JPEG (R, G, B).
    pub input: PathBuf,

    /// Number of classes.
    #[arg(short = 'k', long = "k", default_value_t = 6, value_name = "K")]
    pub k: usize,

    /// Bands to use, 1-based, separated by commas (default: all).
    #[arg(long, value_name = "LIST")]
    pub bands: Option<BandList>,

    /// Add a normalised difference as a feature: ndvi:RED,NIR gives (NIR - Red)/(NIR + Red);
    /// nd:A,B gives (B - A)/(B + A). Repeat for several.
    #[arg(long = "index", value_name = "ndvi:RED,NIR|nd:A,B")]
    pub index: Vec<crate::landcover::IndexSpec>,

    /// Feature scaling: zscore (each feature to mean 0, standard deviation 1) or none.
    #[arg(long, default_value = "zscore", value_name = "zscore|none")]
    pub scale: crate::landcover::Scale,

    /// Nodata value (default: the file's GDAL_NODATA tag, if any); such pixels become class 0.
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    pub nodata: Option<f64>,

    /// hard or soft k-means.
    #[arg(long, default_value = "hard", value_name = "hard|soft")]
    pub mode: Mode,

    /// Soft sharpness in 1/(scaled feature unit)², or auto (1/σ² of the hard solution).
    #[arg(
        long,
        default_value = "auto",
        value_name = "NUMBER|auto",
        allow_hyphen_values = true
    )]
    pub beta: Beta,

    /// Seed of the sample and of k-means++.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,

    /// Independent k-means++ starts; the lowest SSE is kept.
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub restarts: usize,

    /// Most iterations of each phase.
    #[arg(long = "max-iter", default_value_t = 300, value_name = "N")]
    pub max_iter: usize,

    /// Stop when an iteration changes the objective by at most this fraction.
    #[arg(long, default_value_t = 1e-6, value_name = "FRACTION")]
    pub tolerance: f64,

    /// Hard phase also stops when the means' summed squared move in one iteration is at
    /// most this times the data's mean variance per dimension (0 = off).
    #[arg(
        long = "shift-tolerance",
        default_value_t = 1e-4,
        value_name = "FRACTION"
    )]
    pub shift_tolerance: f64,

    /// Pixels in the seeded, spatially spread fitting sample (all pixels when the scene is smaller).
    #[arg(long, default_value_t = 2_000_000, value_name = "N", value_parser = positive_count)]
    pub sample: usize,

    /// Output folder (created if missing).
    #[arg(short = 'o', long = "out", default_value = ".", value_name = "DIR")]
    pub out: PathBuf,

    /// Refuse rasters with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = 1_000_000_000, value_name = "N")]
    pub max_pixels: u64,

    /// Print the classes document on standard output.
    #[arg(long)]
    pub json: bool,
}

/// A band list such as `2,3,4,8` (1-based).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BandList(pub Vec<usize>);

impl std::str::FromStr for BandList {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        crate::landcover::parse_bands(s).map(BandList)
    }
}

impl LandcoverArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> crate::landcover::LandcoverOptions {
        crate::landcover::LandcoverOptions {
            k: self.k,
            bands: self.bands.as_ref().map(|b| b.0.clone()),
            indices: self.index.clone(),
            scale: self.scale,
            nodata: self.nodata,
            mode: self.mode,
            beta: self.beta,
            seed: self.seed,
            restarts: self.restarts,
            max_iter: self.max_iter,
            tolerance: self.tolerance,
            shift_tolerance: self.shift_tolerance,
            sample: self.sample,
            limits: Limits {
                max_pixels: self.max_pixels,
                ..Limits::default()
            },
        }
    }
}

/// Flags of `separate`.
#[derive(Debug, Args, Clone)]
pub struct SeparateArgs {
    /// Artwork to separate (sRGB; PNG, JPEG, TIFF, WebP, BMP, GIF).
    pub input: PathBuf,

    /// Ink library: CSV (name,L,a,b in CIELAB D50, or name,hex) or JSON.
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

    /// Seed of the k-means start of the ink search.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,

    /// How inks are chosen. `families` (default): the lowest total ΔE2000, then every
    /// distinct colour family of the artwork that a library ink matches (within ΔE2000 6)
    /// gets that ink, in place of an ink no family needs. `plain`: the lowest total ΔE2000
    /// alone.
    #[arg(long, default_value = "families", value_name = "families|plain")]
    pub objective: crate::families::Objective,

    /// Output folder (created if missing).
    #[arg(short = 'o', long = "out", default_value = ".", value_name = "DIR")]
    pub out: PathBuf,

    /// Refuse images with more pixels than this (checked from the header).
    #[arg(long = "max-pixels", default_value_t = Limits::default().max_pixels, value_name = "N")]
    pub max_pixels: u64,

    /// Print the separation document on standard output.
    #[arg(long)]
    pub json: bool,
}

/// Parses `#rrggbb`.
pub fn parse_colour(s: &str) -> Result<[u8; 3], String> {
    crate::colour::parse_hex(s)
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
            seed: self.seed,
            limits: Limits::with_max_pixels(self.max_pixels),
            target: quality_target(self.target_delta_e, self.target_p95, self.k_max),
            objective: self.objective,
        }
    }
}

/// Flags of `reduce`.
#[derive(Debug, Args, Clone)]
pub struct ReduceArgs {
    /// Image to reduce (PNG, JPEG, TIFF, WebP, BMP, GIF; 8 or 16 bits per sample), or `-`
    /// to read it from standard input (outputs are then named stdin.*).
    pub input: PathBuf,

    #[command(flatten)]
    pub settings: ReduceFlags,

    /// Output folder (created if missing).
    #[arg(
        short = 'o',
        long = "out",
        default_value = ".",
        value_name = "DIR",
        conflicts_with = "stdout"
    )]
    pub out: PathBuf,

    /// Print the palette document on standard output.
    #[arg(long, conflicts_with = "stdout")]
    pub json: bool,

    /// Write this one output to standard output instead of files (for pipelines).
    #[arg(long, value_name = "reduced|uncertainty|palette")]
    pub stdout: Option<crate::reduce::OneOutput>,
}

/// The reduction settings shared by `reduce`, `batch`, `learn` and `apply`.
#[derive(Debug, Args, Clone)]
pub struct ReduceFlags {
    /// Number of colours (at least 1). Fewer are returned if the image has fewer distinct colours.
    #[arg(short = 'k', long = "k", default_value_t = 8, value_name = "K")]
    pub k: usize,

    /// hard: each pixel one colour; soft: each pixel a probability over colours,
    /// r ∝ exp(−β·½ΔE²), started from the hard solution.
    #[arg(long, default_value = "hard", value_name = "hard|soft")]
    pub mode: Mode,

    /// Sharpness of the soft assignment in 1/ΔE*ab² (CIELAB) or 1/OKLab-unit² (OKLab),
    /// or `auto` for 1/σ² with σ² the pooled within-cluster variance of the hard solution.
    /// In hard mode it sets only the sharpness of the uncertainty map.
    #[arg(
        long,
        default_value = "auto",
        value_name = "NUMBER|auto",
        allow_hyphen_values = true
    )]
    pub beta: Beta,

    /// Space the colours are chosen in.
    #[arg(long, default_value = "cielab", value_name = "cielab|oklab")]
    pub space: Space,

    /// Seed of the random generator (ChaCha8); same seed, same output.
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,

    /// Independent k-means++ starts; the one with the lowest SSE is kept.
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub restarts: usize,

    /// Most iterations of each phase (hard, then soft).
    #[arg(long = "max-iter", default_value_t = 300, value_name = "N")]
    pub max_iter: usize,

    /// Stop when an iteration changes the objective by at most this fraction.
    #[arg(long, default_value_t = 1e-6, value_name = "FRACTION")]
    pub tolerance: f64,

    /// Hard phase also stops when the means' summed squared move in one iteration is at
    /// most this times the data's mean variance per dimension (0 = off).
    #[arg(
        long = "shift-tolerance",
        default_value_t = 1e-4,
        value_name = "FRACTION"
    )]
    pub shift_tolerance: f64,

    /// Dithering of the reduced image.
    #[arg(long, default_value = "none", value_name = "none|floyd-steinberg")]
    pub dither: Dither,

    /// Refuse images with more pixels than this (checked from the header, before decoding).
    #[arg(long = "max-pixels", default_value_t = Limits::default().max_pixels, value_name = "N")]
    pub max_pixels: u64,

    /// Also write STEM.uncertainty.tif (32-bit float, 0..1).
    #[arg(long = "uncertainty-raw")]
    pub uncertainty_raw: bool,

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
    #[arg(
        long = "k-max",
        default_value_t = 16,
        value_name = "K",
        requires = "target_delta_e"
    )]
    pub k_max: usize,

    /// Start from deterministic annealing (Rose, Gurewitz & Fox 1990) instead of
    /// k-means++: soft k-means with β raised geometrically from --anneal-start to
    /// --anneal-end, then split-and-merge moves (--split-merge), then a hard Lloyd polish.
    #[arg(long)]
    pub anneal: bool,

    /// First β of the annealing, as a multiple of the critical β_c = 1/λ_max (λ_max: the
    /// data's largest variance along a principal axis, in ΔE*ab² for CIELAB).
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

impl ReduceFlags {
    /// The library options these flags ask for.
    pub fn options(&self) -> ReduceOptions {
        ReduceOptions {
            k: self.k,
            mode: self.mode,
            beta: self.beta,
            space: self.space,
            seed: self.seed,
            restarts: self.restarts,
            max_iter: self.max_iter,
            tolerance: self.tolerance,
            shift_tolerance: self.shift_tolerance,
            dither: self.dither,
            limits: Limits::with_max_pixels(self.max_pixels),
            uncertainty_raw: self.uncertainty_raw,
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
            target: quality_target(self.target_delta_e, self.target_p95, self.k_max),
            objective: self.objective,
            pinned: self.pin.clone(),
        }
    }
}

impl ReduceArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> ReduceOptions {
        self.settings.options()
    }
}

const BATCH_EXAMPLES: &str = "\
Examples:
  chromasift batch shoot/ -k 12 -o reduced/
  chromasift batch shoot/ -k 16 --shared -o reduced/ --jobs 2
  chromasift batch shoot/ -k 16 --palette brand.palette.json -o reduced/

Mirrors the folder under -o with the reduce outputs of each image, and writes
batch-report.json and batch-report.csv there (plus shared.palette.json with --shared, and
contact-sheet.html with --contact-sheet). A rerun skips images whose outputs are up to date.

Exit status: 0 all images done, 1 some images failed, 2 usage error, 130 interrupted.";

/// Flags of `batch`.
#[derive(Debug, Args, Clone)]
pub struct BatchArgs {
    /// Folder of images (walked recursively).
    pub input: PathBuf,

    #[command(flatten)]
    pub settings: ReduceFlags,

    /// One palette for the whole batch, fitted on the merged histograms of all images.
    #[arg(long, conflicts_with = "palette")]
    pub shared: bool,

    /// Map every image onto this palette document instead of fitting one per image.
    #[arg(long, value_name = "FILE")]
    pub palette: Option<PathBuf>,

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

    /// Print the batch report on standard output.
    #[arg(long)]
    pub json: bool,
}

/// Flags of `learn`.
#[derive(Debug, Args, Clone)]
pub struct LearnArgs {
    /// Folders, images or histogram files (from `chromasift histogram`) to learn from.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,

    #[command(flatten)]
    pub settings: ReduceFlags,

    /// The palette document to write.
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: PathBuf,

    /// Also print the palette document on standard output.
    #[arg(long)]
    pub json: bool,
}

/// Flags of `apply`.
#[derive(Debug, Args, Clone)]
pub struct ApplyArgs {
    /// Image to map onto the palette.
    pub input: PathBuf,

    /// Palette document (from `learn`, `reduce` or `batch --shared`).
    #[arg(long, value_name = "FILE")]
    pub palette: PathBuf,

    #[command(flatten)]
    pub settings: ReduceFlags,

    /// Output folder (created if missing).
    #[arg(short = 'o', long = "out", default_value = ".", value_name = "DIR")]
    pub out: PathBuf,

    /// Print the palette document on standard output.
    #[arg(long)]
    pub json: bool,
}

/// Flags of `histogram`.
#[derive(Debug, Args, Clone)]
pub struct HistogramArgs {
    /// Folders or images to summarise.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,

    /// The histogram file to write.
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: PathBuf,

    /// Refuse images with more pixels than this.
    #[arg(long = "max-pixels", default_value_t = Limits::default().max_pixels, value_name = "N")]
    pub max_pixels: u64,

    /// Print a summary (file, pixels, distinct colours) as JSON on standard output.
    #[arg(long)]
    pub json: bool,
}

/// The `--target-delta-e`, `--target-p95` and `--k-max` flags as a quality target.
fn quality_target(
    delta_e: Option<f64>,
    p95: bool,
    k_max: usize,
) -> Option<crate::reduce::QualityTarget> {
    delta_e.map(|delta_e| crate::reduce::QualityTarget {
        delta_e,
        statistic: if p95 {
            crate::reduce::TargetStatistic::P95
        } else {
            crate::reduce::TargetStatistic::Mean
        },
        k_max,
    })
}

/// A count of at least 1 (`--sample`).
fn positive_count(s: &str) -> Result<usize, String> {
    match s.parse::<usize>() {
        Ok(0) => Err("must be at least 1".into()),
        Ok(n) => Ok(n),
        Err(e) => Err(e.to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reduce(args: &[&str]) -> ReduceArgs {
        let mut v = vec!["chromasift", "reduce", "in.png"];
        v.extend_from_slice(args);
        match Cli::try_parse_from(v).unwrap().command {
            Command::Reduce(r) => r,
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn defaults() {
        let r = reduce(&[]);
        let o = r.options();
        assert_eq!(o, ReduceOptions::new(8));
        assert_eq!(r.out, PathBuf::from("."));
        assert!(!r.json);
    }

    #[test]
    fn each_flag_parses() {
        assert_eq!(reduce(&["-k", "5"]).settings.k, 5);
        assert_eq!(reduce(&["--k", "7"]).settings.k, 7);
        assert_eq!(reduce(&["-o", "x"]).out, PathBuf::from("x"));
        assert_eq!(reduce(&["--out", "y"]).out, PathBuf::from("y"));
        assert_eq!(reduce(&["--mode", "soft"]).settings.mode, Mode::Soft);
        assert_eq!(reduce(&["--beta", "0.02"]).settings.beta, Beta::Fixed(0.02));
        assert_eq!(reduce(&["--beta", "auto"]).settings.beta, Beta::Auto);
        assert_eq!(reduce(&["--space", "oklab"]).settings.space, Space::Oklab);
        assert_eq!(reduce(&["--seed", "3"]).settings.seed, 3);
        assert_eq!(reduce(&["--restarts", "4"]).settings.restarts, 4);
        assert_eq!(reduce(&["--max-iter", "9"]).settings.max_iter, 9);
        assert_eq!(reduce(&["--tolerance", "0.01"]).settings.tolerance, 0.01);
        assert_eq!(
            reduce(&["--shift-tolerance", "0"]).settings.shift_tolerance,
            0.0
        );
        assert_eq!(
            reduce(&["--dither", "floyd-steinberg"]).settings.dither,
            Dither::FloydSteinberg
        );
        assert_eq!(reduce(&["--max-pixels", "100"]).settings.max_pixels, 100);
        assert!(reduce(&["--uncertainty-raw"]).settings.uncertainty_raw);
        assert!(reduce(&["--json"]).json);
    }

    fn separate(args: &[&str]) -> SeparateArgs {
        let mut v = vec!["chromasift", "separate", "art.png", "--inks", "inks.csv"];
        v.extend_from_slice(args);
        match Cli::try_parse_from(v).unwrap().command {
            Command::Separate(s) => s,
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn separate_flags_parse() {
        let d = separate(&[]);
        assert_eq!(d.options(), crate::separate::SeparateOptions::default());
        assert_eq!(d.inks, PathBuf::from("inks.csv"));
        assert_eq!(separate(&["-k", "3"]).k, 3);
        assert_eq!(
            separate(&["--use", "Night Black, Harbour Blue"])
                .options()
                .use_inks,
            vec!["Night Black", "Harbour Blue"]
        );
        assert!(separate(&["--all"]).all);
        assert_eq!(
            separate(&["--substrate", "#ffeedd"]).substrate,
            Some([0xff, 0xee, 0xdd])
        );
        assert_eq!(separate(&["--min-area", "24"]).min_area, 24);
        assert_eq!(separate(&["--trap", "2"]).trap, 2);
        assert_eq!(separate(&["--dpi", "300"]).dpi, Some(300.0));
        assert_eq!(separate(&["--seed", "5"]).seed, 5);
        assert_eq!(separate(&["-o", "plates"]).out, PathBuf::from("plates"));
        assert_eq!(separate(&["--max-pixels", "9"]).max_pixels, 9);
        assert!(separate(&["--json"]).json);
        let bad = [
            "chromasift",
            "separate",
            "a.png",
            "--inks",
            "i.csv",
            "--substrate",
            "white",
        ];
        assert!(Cli::try_parse_from(bad).is_err());
    }

    #[test]
    fn landcover_flags_parse() {
        let parse = |args: &[&str]| {
            let mut v = vec!["chromasift", "landcover", "scene.tif"];
            v.extend_from_slice(args);
            match Cli::try_parse_from(v).unwrap().command {
                Command::Landcover(l) => l,
                other => panic!("{other:?}"),
            }
        };
        let d = parse(&[]).options();
        assert_eq!(d.k, 6);
        assert_eq!(d.scale, crate::landcover::Scale::Zscore);
        assert_eq!(parse(&["-k", "8"]).k, 8);
        assert_eq!(
            parse(&["--bands", "2,3,4,8"]).options().bands,
            Some(vec![2, 3, 4, 8])
        );
        let ix = parse(&["--index", "ndvi:3,4", "--index", "nd:2,4"]).index;
        assert_eq!(ix.len(), 2);
        assert_eq!(ix[1].name(), "nd:2,4");
        assert_eq!(
            parse(&["--scale", "none"]).scale,
            crate::landcover::Scale::None
        );
        assert_eq!(parse(&["--nodata", "-9999"]).nodata, Some(-9999.0));
        assert_eq!(parse(&["--mode", "soft"]).mode, Mode::Soft);
        assert_eq!(parse(&["--beta", "2"]).beta, Beta::Fixed(2.0));
        assert_eq!(parse(&["--seed", "4"]).seed, 4);
        assert_eq!(parse(&["--restarts", "3"]).restarts, 3);
        assert_eq!(parse(&["--max-iter", "7"]).max_iter, 7);
        assert_eq!(parse(&["--tolerance", "0.5"]).tolerance, 0.5);
        assert_eq!(parse(&["--sample", "1000"]).sample, 1000);
        assert_eq!(parse(&["-o", "c"]).out, PathBuf::from("c"));
        assert_eq!(parse(&["--max-pixels", "10"]).max_pixels, 10);
        assert!(parse(&["--json"]).json);
        assert!(Cli::try_parse_from(["chromasift", "landcover", "s.tif", "--bands", "0"]).is_err());
        assert!(
            Cli::try_parse_from(["chromasift", "landcover", "s.tif", "--index", "evi:1,2"])
                .is_err()
        );
    }

    #[test]
    fn bad_values_are_refused_by_the_parser() {
        for bad in [
            &["--mode", "fuzzy"][..],
            &["--space", "rgb"],
            &["--dither", "ordered"],
            &["--beta", "sharp"],
            &["-k", "-1"],
        ] {
            let mut v = vec!["chromasift", "reduce", "in.png"];
            v.extend_from_slice(bad);
            assert!(Cli::try_parse_from(v).is_err(), "{bad:?}");
        }
    }
}
