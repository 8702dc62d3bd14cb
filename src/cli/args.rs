//! The flags of each command, as typed, and their resolution into library options.

use super::engine::{EngineFlags, FolderOutput, LimitFlag, SceneFlags};
use crate::colour::Space;
use crate::features::quality::{QualityTarget, TargetStatistic};
use crate::limits::Limits;
use crate::reduce::{OutputProfile, ReduceOptions};
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
    #[arg(
        long = "k-max",
        default_value_t = 16,
        value_name = "K",
        requires = "target_delta_e"
    )]
    pub k_max: usize,

    /// How colours are chosen. `families` (default): k-means, then every distinct colour
    /// family the palette would lose (a small shape in a colour unlike its surroundings,
    /// at least 0.05 % of the pixels, clamped to 8–200 pixels, or down to 8 pixels when
    /// ΔE2000 20 from every other colour) is brought back in place of the least needed
    /// colour, such as one of two near-duplicates in a smooth area.
    /// `plain`: plain k-means, the pixel-weighted squared error alone (the textbook objective; `sse` is accepted too).
    #[arg(long, default_value = "families", value_name = "families|plain")]
    pub objective: crate::families::Objective,

    /// A colour the palette must hold exactly: `#rrggbb`, or CIELAB as `L,a,b`
    /// (e.g. `--pin '#d62828' --pin 95,0,0`). Repeat for more; pinned colours count
    /// toward -k and never move.
    #[arg(long = "pin", value_name = "COLOUR", value_parser = crate::families::parse_colour, conflicts_with = "target_delta_e")]
    pub pin: Vec<[u8; 3]>,

    /// Colours the palette must hold exactly, read from a file: a palette document, a list
    /// of hex colours (one per line) or a CSV table with hex or L,a,b columns (as
    /// `apply --palette` reads them). Repeat for more; taken with any --pin.
    #[arg(long = "pin-file", value_name = "FILE", value_parser = parse_pin_file, conflicts_with = "target_delta_e")]
    pub pin_file: Vec<PinFile>,
}

/// The colours of one `--pin-file`.
#[derive(Debug, Clone, PartialEq)]
pub struct PinFile(pub Vec<[u8; 3]>);

fn parse_pin_file(s: &str) -> Result<PinFile, String> {
    crate::learn::read_palette(std::path::Path::new(s))
        .map(|p| PinFile(p.colours))
        .map_err(|e| super::flag_wording(&e.to_string()))
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

    /// Also write the per-pixel CIEDE2000 between source and reduced image:
    /// STEM.loss.tif (32-bit float) and STEM.loss.png (a colour scale with its legend).
    #[arg(long = "loss-map")]
    pub loss_map: bool,

    /// The numbers the reduced image is written in: `source` (the input's colour profile,
    /// embedded again; sRGB for an untagged input) or `srgb`.
    #[arg(
        long = "output-profile",
        default_value = "source",
        value_name = "source|srgb"
    )]
    pub output_profile: crate::reduce::OutputProfile,

    /// Do not carry the input's EXIF, colour profile and resolution into the reduced
    /// image (the numbers are then sRGB).
    #[arg(long = "strip-metadata")]
    pub strip_metadata: bool,

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
        loss_map: image.is_some_and(|i| i.loss_map),
        output_profile: image.map_or(OutputProfile::Source, |i| i.output_profile),
        keep_metadata: !image.is_some_and(|i| i.strip_metadata),
        target: quality_target(palette.target_delta_e, palette.target_p95, palette.k_max),
        objective: palette.objective,
        pinned: palette
            .pin
            .iter()
            .chain(palette.pin_file.iter().flat_map(|f| &f.0))
            .copied()
            .collect(),
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
        reduce_options(
            &self.palette,
            Some(&self.image),
            &self.engine,
            self.image.limit.limits(),
        )
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

    /// With --shared: every image counts the same in the shared palette, whatever its size
    /// (by default every pixel counts the same, so large images weigh more).
    #[arg(long = "equal-weight", requires = "shared")]
    pub equal_weight: bool,

    /// Map every image onto this palette instead of fitting one per image: a palette
    /// document (from `learn`, `reduce` or `batch --shared`), a list of hex colours (one per
    /// line) or a CSV table with a name and hex or L,a,b columns (as --pin-file reads them).
    #[arg(long = "palette", id = "palette_file", value_name = "FILE")]
    pub palette_file: Option<PathBuf>,

    /// Images processed at once, 1 to 256 (default: the number of cores). Whatever is
    /// asked, at most twice the cores run, and one per 256 MB of available memory.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..=256))]
    pub jobs: Option<u16>,

    /// Redo images whose outputs are already up to date.
    #[arg(long)]
    pub force: bool,

    /// No progress output.
    #[arg(long, short = 'q')]
    pub quiet: bool,

    /// Also write review.html: before and after thumbnails (written into review/), each
    /// image's palette, ΔE2000 figures and lost colours, worst first. Relative links only:
    /// the output folder can be moved or shared and the page opens offline.
    #[arg(long = "review-page", alias = "contact-sheet")]
    pub review_page: bool,

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
        reduce_options(
            &self.palette,
            Some(&self.image),
            &self.engine,
            self.image.limit.limits(),
        )
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

    /// The palette to map onto: a palette document (from `learn`, `reduce` or `batch
    /// --shared`), a list of hex colours (one per line) or a CSV table with a name and hex or
    /// L,a,b columns (as --pin-file reads them).
    #[arg(long, value_name = "FILE")]
    pub palette: PathBuf,

    #[command(flatten)]
    pub image: ImageFlags,

    /// Sharpness of the uncertainty map, in 1/ΔE*ab² (1/OKLab-unit² for a palette chosen
    /// in OKLab); `auto`: the palette document's β when it records one, else 1/σ², σ² the
    /// pooled variance of this photo's pixels around the palette colours they are mapped to.
    #[arg(
        long,
        default_value = "auto",
        value_name = "NUMBER|auto",
        allow_hyphen_values = true
    )]
    pub beta: crate::cluster::Beta,

    #[command(flatten)]
    pub output: FolderOutput,
}

impl ApplyArgs {
    /// The library options these flags ask for (the palette's colours come from its file).
    pub fn options(&self) -> ReduceOptions {
        let mut o = ReduceOptions::new(crate::reduce::DEFAULT_K);
        o.engine.beta = self.beta;
        o.dither = self.image.dither;
        o.uncertainty_raw = self.image.uncertainty_raw;
        o.loss_map = self.image.loss_map;
        o.output_profile = self.image.output_profile;
        o.keep_metadata = !self.image.strip_metadata;
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
    /// Artwork to separate (PNG, JPEG, TIFF, WebP, BMP, GIF; read through its colour
    /// profile, sRGB when untagged), or `-` for standard input.
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

    /// Paper or garment colour (#rrggbb): pixels as near to it as to any ink, or nearer, get
    /// no ink; it counts as a colour that needs no screen.
    #[arg(long, value_name = "COLOUR", value_parser = parse_colour)]
    pub substrate: Option<[u8; 3]>,

    /// Smallest region (8-connected) any plate may hold, in pixels; smaller islands join
    /// the neighbour they share the longest border with.
    #[arg(long = "min-area", default_value_t = crate::separate::DEFAULT_MIN_AREA, value_name = "PX")]
    pub min_area: usize,

    /// Trap width in pixels: lighter inks spread under darker neighbours.
    #[arg(long, default_value_t = 0, value_name = "PX")]
    pub trap: u32,

    /// Print resolution in dots per inch, for areas in cm² and the films (default: from
    /// the file; films are refused when neither gives one).
    #[arg(long, value_name = "DPI")]
    pub dpi: Option<f64>,

    /// Pixels less opaque than this get no ink; the others are separated as if opaque
    /// (default 50 %, common practice).
    #[arg(long = "alpha-threshold", default_value = "50", value_name = "PERCENT", value_parser = percent)]
    pub alpha_threshold: f64,

    /// Also write films to expose screens from, in these formats: 1-bit TIFF and PNG per
    /// plate, one PDF with every film at true size (e.g. `tiff,pdf`; `all` for the three).
    /// With films come a stacked proof (STEM.stack.png) and per-plate previews.
    #[arg(long, value_name = "tiff,pdf,png", value_parser = film_formats)]
    pub films: Option<crate::film::FilmFormats>,

    /// Clear film around the artwork on every side, for the marks, label and step strip.
    #[arg(long = "margin-mm", default_value_t = crate::film::DEFAULT_MARGIN_MM, value_name = "MM", requires = "films")]
    pub margin_mm: f64,

    /// Flip the films left to right, for exposure with the emulsion side down.
    #[arg(long, requires = "films")]
    pub mirror: bool,

    /// Job name printed on every film (default: the input's file name without extension).
    #[arg(long, value_name = "NAME", requires = "films")]
    pub job: Option<String>,

    /// Screening of tints on the films: round or elliptical dots on a grid (lines per inch
    /// and an angle per plate), or stochastic dots; `none` prints a tint solid from 50 %.
    #[arg(long, default_value = "none", value_name = "none|round|elliptical|stochastic", value_parser = screen_kind, requires = "films")]
    pub halftone: HalftoneChoice,

    /// Lines per inch of the halftone grid (default 55, common practice for fine meshes).
    #[arg(long, default_value_t = crate::film::DEFAULT_LPI, value_name = "LPI", requires = "films")]
    pub lpi: f64,

    /// Screen angles in degrees, one per tinted plate in order, separated by commas
    /// (default: 45, 75, 15, 0, common practice).
    #[arg(
        long = "screen-angles",
        value_name = "DEGREES",
        value_delimiter = ',',
        requires = "films"
    )]
    pub screen_angles: Vec<f64>,

    /// Print each ink as a tint where the artwork is between the ink and the substrate
    /// (Murray–Davies dot area), screened with --halftone; without it plates are solid.
    #[arg(long, requires = "films")]
    pub tints: bool,

    /// Smallest shape the films keep: millimetres (`0.3` or `0.3mm`), film pixels (`4px`)
    /// or thread spacings of a mesh (`3threads@230`: 3 × 25.4 mm / 230). Thinner shapes
    /// longer than 3 times it (lines, letters) stay; what goes is listed in
    /// STEM.cleanup.csv and drawn in STEM.cleanup.png.
    #[arg(long = "min-feature", value_name = "SIZE", value_parser = min_feature, requires = "films")]
    pub min_feature: Option<crate::film::Length>,

    /// Add an underbase white plate, printed first under every colour (for dark substrates).
    #[arg(long, requires = "films")]
    pub underbase: bool,

    /// How far the underbase is pulled back from the colours' edges (default 0.2 mm).
    #[arg(
        long = "choke-mm",
        default_value_t = 0.2,
        value_name = "MM",
        requires = "underbase"
    )]
    pub choke_mm: f64,

    /// Add a highlight white plate, printed last where the artwork's CIE L* is at least
    /// this (default 90).
    #[arg(long = "highlight-white", value_name = "L*", num_args = 0..=1, default_missing_value = "90", requires = "films")]
    pub highlight_white: Option<f64>,

    /// Remove plate, film and preview files of an earlier run of the same artwork with
    /// other plates (after the new ones are in place) instead of refusing.
    #[arg(long)]
    pub replace: bool,

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
            alpha_threshold: self.alpha_threshold,
            films: self.films.map(|formats| crate::separate::FilmSettings {
                formats,
                margin_mm: self.margin_mm,
                mirror: self.mirror,
                job: self.job.clone(),
                halftone: self.halftone.0.map(|kind| crate::film::Halftone {
                    kind,
                    lpi: self.lpi,
                    angles: self.screen_angles.clone(),
                    ..Default::default()
                }),
                tints: self.tints,
                min_feature: self.min_feature.map(crate::film::MinFeature::new),
                underbase: self.underbase.then(|| crate::film::UnderbaseOptions {
                    choke: crate::film::Length::Mm(self.choke_mm),
                    ..Default::default()
                }),
                highlight_white: self.highlight_white,
            }),
            replace: self.replace,
        }
    }
}

/// `50` or `50%`.
fn percent(s: &str) -> Result<f64, String> {
    let v: f64 = s
        .trim()
        .trim_end_matches('%')
        .trim()
        .parse()
        .map_err(|_| format!("'{s}' is not a percentage (e.g. 50 or 50%)"))?;
    if !(v.is_finite() && (0.0..=100.0).contains(&v)) {
        return Err(format!("'{s}' is not between 0 and 100 %"));
    }
    Ok(v)
}

/// `tiff,pdf,png` in any order, or `all`.
fn film_formats(s: &str) -> Result<crate::film::FilmFormats, String> {
    let mut f = crate::film::FilmFormats {
        tiff: false,
        png: false,
        pdf: false,
    };
    for part in s.split(',').map(|p| p.trim().to_ascii_lowercase()) {
        match part.as_str() {
            "tiff" | "tif" => f.tiff = true,
            "png" => f.png = true,
            "pdf" => f.pdf = true,
            "all" => f = crate::film::FilmFormats::default(),
            other => {
                return Err(format!(
                    "'{other}' is not a film format; use tiff, pdf, png or all, separated by commas"
                ))
            }
        }
    }
    Ok(f)
}

/// The `--halftone` choice: a screen, or none.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HalftoneChoice(pub Option<crate::film::ScreenKind>);

/// `none`, `round`, `elliptical` or `stochastic`.
fn screen_kind(s: &str) -> Result<HalftoneChoice, String> {
    use crate::film::{DotShape, ScreenKind};
    match s.trim().to_ascii_lowercase().as_str() {
        "none" => Ok(HalftoneChoice(None)),
        "round" => Ok(HalftoneChoice(Some(ScreenKind::Am(DotShape::Round)))),
        "elliptical" => Ok(HalftoneChoice(Some(ScreenKind::Am(DotShape::Elliptical)))),
        "stochastic" => Ok(HalftoneChoice(Some(ScreenKind::Stochastic))),
        other => Err(format!(
            "'{other}' is not a halftone; use none, round, elliptical or stochastic"
        )),
    }
}

/// `0.3`, `0.3mm`, `4px` or `3threads@230`.
fn min_feature(s: &str) -> Result<crate::film::Length, String> {
    use crate::film::Length;
    let t = s.trim().to_ascii_lowercase();
    let number = |v: &str| -> Result<f64, String> {
        v.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| {
                format!("'{s}' is not a size; give millimetres (0.3mm), pixels (4px) or thread spacings of a mesh (3threads@230)")
            })
    };
    if let Some((m, mesh)) = t.split_once("threads@") {
        let mesh_count = number(mesh)?;
        if mesh_count == 0.0 {
            return Err(format!(
                "'{s}': the mesh count must be more than 0 threads per inch"
            ));
        }
        return Ok(Length::Threads {
            mesh_count,
            multiple: number(m)?,
        });
    }
    if let Some(px) = t.strip_suffix("px") {
        return Ok(Length::Px(number(px)?));
    }
    Ok(Length::Mm(number(t.strip_suffix("mm").unwrap_or(&t))?))
}

/// Flags of `landcover`.
#[derive(Debug, Args, Clone)]
pub struct LandcoverArgs {
    /// Raster: TIFF/GeoTIFF with 1-256 bands (8/16/32-bit integers, 32/64-bit float), a
    /// `.stack` list of one-band files, or PNG/JPEG (R, G, B; transparent pixels are
    /// nodata); `-` for standard input.
    pub input: PathBuf,

    /// Number of classes (at most 255).
    #[arg(short = 'k', long = "k", default_value_t = 6, value_name = "K")]
    pub k: usize,

    /// Refuse rasters with more pixels than this (checked from the header). Scenes are
    /// read strip by strip, so the limit is higher than for images.
    #[arg(long = "max-pixels", default_value_t = crate::landcover::MAX_SCENE_PIXELS, value_name = "N")]
    pub max_pixels: u64,

    /// Apply a saved model (from `landcover-fit` or --save-model) instead of fitting: the
    /// same outputs with the model's class numbers. The model fixes K, the scene features
    /// and the engine, so those flags are refused with it.
    #[arg(long, value_name = "FILE", conflicts_with_all = super::landcover::MODEL_FIXES)]
    pub model: Option<PathBuf>,

    /// Also write the fitted model to FILE (JSON), for `landcover --model` on other rasters.
    #[arg(long = "save-model", value_name = "FILE", conflicts_with = "model")]
    pub save_model: Option<PathBuf>,

    #[command(flatten)]
    pub rest: SceneRunFlags,
}

/// The output, scene-feature and engine flags of a command that reads a scene
/// (`landcover`, `sweep`), in that order in the help.
#[derive(Debug, Args, Clone)]
pub struct SceneRunFlags {
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
            scene: self.rest.scene.options(),
            engine: self.rest.engine.options(),
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

    /// Scene features apply to multi-band rasters (colour images ignore them).
    #[command(flatten)]
    pub rest: SceneRunFlags,
}

impl SweepArgs {
    /// The library options these flags ask for.
    pub fn options(&self) -> crate::sweep::SweepOptions {
        crate::sweep::SweepOptions {
            range: self.k,
            space: self.space,
            engine: self.rest.engine.options(),
            silhouette_sample: self.silhouette_sample,
            limits: self.limit.limits(),
            scene: Some(self.rest.scene.options()),
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
