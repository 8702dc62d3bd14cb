//! The command line: flags as typed (one declaration per flag group), their resolution
//! into library options, help and manual pages, and the dispatch of each command.
//! Nothing outside this folder (and `main.rs`) knows a flag.

mod args;
mod engine;
mod help;
mod landcover;
mod run;
mod stdio;

pub use args::{
    parse_colour, ApplyArgs, BatchArgs, HistogramArgs, ImageFlags, LandcoverArgs, LearnArgs,
    PaletteFlags, ReduceArgs, SeparateArgs, SweepArgs,
};
pub use engine::{BandList, BetaFlag, EngineFlags, FolderOutput, LimitFlag, SceneFlags};
pub use help::{flag_wording, manual_pages, suggest};
pub use landcover::{
    LandcoverAssessArgs, LandcoverFitArgs, LandcoverLabelArgs, LandcoverSampleArgs,
};
pub use run::run;

use clap::{Args, Parser, Subcommand};

const REDUCE_EXAMPLES: &str = "\
Examples:
  chromasift reduce fixtures/demo/harbour-poster.png -k 6 -o out/
  chromasift reduce field.jpg -k 6 --mode soft --beta auto -o out/ --seed 3
  chromasift reduce scan.tif -k 12 --space oklab --dither floyd-steinberg --uncertainty-raw -o out/
  chromasift reduce poster.png --target-delta-e 3.0 --k-max 12 -o out/
  chromasift reduce photo.jpg -k 16 --anneal -o out/
  cat photo.png | chromasift reduce - -k 8 --stdout reduced > photo.k8.png

Writes STEM.reduced.png, STEM.palette.json, STEM.palette.csv and STEM.uncertainty.png
(plus STEM.uncertainty.tif with --uncertainty-raw, and STEM.loss.tif and STEM.loss.png
with --loss-map) into the output folder.

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
  chromasift landcover scene.tif -k 6 --save-model scene.model.json -o classes/
  chromasift landcover other-tile.tif --model scene.model.json -o classes/

Writes STEM.classes.tif (class 1..K, 0 = nodata) and STEM.uncertainty.tif (0..1, -1 =
nodata), both with the input's georeferencing, plus STEM.classes.png (preview and legend),
STEM.classes.json and STEM.classes.csv.

Caution: this is an unsupervised split, not a validated land-cover classification. Class
numbers carry no meaning until someone labels them; check against ground truth before any
decision, and defer to local rules and licensed practice.

Exit status: 0 success, 2 bad parameters or unreadable input (nothing is written).";

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

const BATCH_EXAMPLES: &str = "\
Examples:
  chromasift batch shoot/ -k 12 -o reduced/
  chromasift batch shoot/ -k 16 --shared -o reduced/ --jobs 2
  chromasift batch shoot/ -k 16 --palette brand.palette.json -o reduced/

Mirrors the folder under -o with the reduce outputs of each image, and writes
batch-report.json and batch-report.csv there (plus shared.palette.json with --shared, and
review.html with --review-page). A rerun skips images whose outputs are up to date.

Exit status: 0 all images done, 1 some images failed, 2 usage error, 130 interrupted.";

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

    /// Draw one raster's seeded land-cover sample into a file, for `landcover-fit` (one
    /// job per raster on a cluster).
    #[command(name = "landcover-sample", after_help = landcover::SAMPLE_EXAMPLES)]
    LandcoverSample(LandcoverSampleArgs),

    /// Fit one land-cover model from sample files or rasters, for `landcover --model`.
    #[command(name = "landcover-fit", after_help = landcover::FIT_EXAMPLES)]
    LandcoverFit(LandcoverFitArgs),

    /// Check a class raster against reference data (a raster on the same grid, or points):
    /// confusion matrix, accuracies, kappa and error-adjusted areas.
    #[command(name = "landcover-assess", after_help = landcover::ASSESS_EXAMPLES)]
    LandcoverAssess(LandcoverAssessArgs),

    /// Name and merge the classes of a class raster with a label file, and remove patches
    /// below a minimum mapping unit.
    #[command(name = "landcover-label", after_help = landcover::LABEL_EXAMPLES)]
    LandcoverLabel(LandcoverLabelArgs),

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

    /// Print the manual page (roff) of the tool, or of one command, on standard output;
    /// or write every page into a folder.
    #[command(
        after_help = "Examples:\n  chromasift manpage > chromasift.1 && man ./chromasift.1\n  chromasift manpage reduce > chromasift-reduce.1\n  chromasift manpage --all -o man/"
    )]
    Manpage(ManpageArgs),
}

/// Flags of `completions`.
#[derive(Debug, Args, Clone)]
pub struct CompletionsArgs {
    /// Shell to write completions for.
    #[arg(value_name = "bash|zsh|fish|elvish|powershell")]
    pub shell: clap_complete::Shell,
}

/// Flags of `manpage`.
#[derive(Debug, Args, Clone)]
pub struct ManpageArgs {
    /// The command whose page to print (default: the tool's own page).
    #[arg(value_name = "COMMAND", conflicts_with = "all")]
    pub command: Option<String>,

    /// Write every page (the tool's and one per command) into the folder given by -o.
    #[arg(long, requires = "out")]
    pub all: bool,

    /// Folder for --all.
    #[arg(short = 'o', long = "out", value_name = "DIR")]
    pub out: Option<std::path::PathBuf>,
}

#[cfg(test)]
mod tests;
