//! The `landcover` workflow: an unsupervised split of a multi-band raster into K classes,
//! aligned to the map (georeferencing copied), with an uncertainty map and per-class
//! statistics. An unsupervised split is not a validated classification: class numbers
//! mean nothing until someone labels them against ground truth.
//!
//! Streaming: pass 1 reads the raster block by block for feature statistics and a seeded,
//! spatially spread sample; k-means is fitted on the sample; pass 2 assigns every pixel
//! strip by strip while the class raster is written, and hands the uncertainty rows to a
//! second thread that writes the uncertainty raster. Memory is bounded by the sample and a
//! few strips, not by the scene.

use crate::cluster::{fit, soft_assign, Beta, Dataset, KMeansParams, Mode};
use crate::colour::{self, Space};
use crate::error::{Error, ParamsError, Result};
use crate::raster::geotiff::{self, GeoRaster, RasterInfo};
use crate::limits::Limits;
use crate::output::{OutputSet, PendingOutput};
use crate::raster;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Value written to the uncertainty raster where the class raster has nodata (class 0).
pub const UNCERTAINTY_NODATA: f32 = -1.0;

/// Feature scaling.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Scale {
    /// Raw values (input units).
    None,
    /// Each feature standardised to mean 0, standard deviation 1 over the valid pixels.
    Zscore,
}

impl std::str::FromStr for Scale {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "none" => Ok(Scale::None),
            "zscore" | "z-score" => Ok(Scale::Zscore),
            _ => Err(format!("unknown scaling '{s}' (use none or zscore)")),
        }
    }
}

/// A normalised difference (B − A)/(B + A) of two bands (1-based). `ndvi:RED,NIR` is the
/// normalised difference vegetation index (Rouse et al. 1974), (NIR − Red)/(NIR + Red).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct IndexSpec {
    /// `ndvi` or `nd`.
    pub kind: String,
    pub a: usize,
    pub b: usize,
}

impl IndexSpec {
    /// Name as given, e.g. `ndvi:3,4`.
    pub fn name(&self) -> String {
        format!("{}:{},{}", self.kind, self.a, self.b)
    }
}

impl std::str::FromStr for IndexSpec {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let (kind, rest) = s
            .split_once(':')
            .ok_or_else(|| format!("index '{s}' must look like ndvi:RED,NIR or nd:A,B"))?;
        let kind = kind.trim().to_ascii_lowercase();
        if kind != "ndvi" && kind != "nd" {
            return Err(format!("unknown index '{kind}' (use ndvi or nd)"));
        }
        let (a, b) = rest
            .split_once(',')
            .ok_or_else(|| format!("index '{s}' needs two bands, e.g. {kind}:3,4"))?;
        let band = |t: &str| {
            t.trim()
                .parse::<usize>()
                .ok()
                .filter(|&v| v >= 1)
                .ok_or_else(|| format!("index '{s}': '{t}' is not a band number (1, 2, ...)"))
        };
        Ok(IndexSpec {
            kind,
            a: band(a)?,
            b: band(b)?,
        })
    }
}

/// Normalised difference (b − a)/(b + a); NaN where b + a = 0.
#[inline]
pub fn normalised_difference(a: f32, b: f32) -> f32 {
    let s = a + b;
    if s == 0.0 {
        f32::NAN
    } else {
        (b - a) / s
    }
}

/// Parses a band list such as `2,3,4,8`.
pub fn parse_bands(s: &str) -> std::result::Result<Vec<usize>, String> {
    s.split(',')
        .map(|t| {
            t.trim()
                .parse::<usize>()
                .ok()
                .filter(|&v| v >= 1)
                .ok_or_else(|| format!("'{t}' is not a band number (1, 2, ...)"))
        })
        .collect()
}

/// Settings of a land-cover split.
#[derive(Debug, Clone, PartialEq)]
pub struct LandcoverOptions {
    /// Classes (at least 1). Default: 6.
    pub k: usize,
    /// Bands to use (1-based); default all.
    pub bands: Option<Vec<usize>>,
    /// Normalised-difference indices added as features.
    pub indices: Vec<IndexSpec>,
    /// Feature scaling. Default: z-score.
    pub scale: Scale,
    /// Nodata value; default: the file's GDAL_NODATA tag, if any.
    pub nodata: Option<f64>,
    pub mode: Mode,
    pub beta: Beta,
    pub seed: u64,
    pub restarts: usize,
    pub max_iter: usize,
    pub tolerance: f64,
    /// Means' summed squared move (relative to the data's mean variance) that ends the
    /// hard phase. Default: 1e-4.
    pub shift_tolerance: f64,
    /// Pixels in the fitting sample (seeded, one per grid cell). Default: 2 000 000.
    pub sample: usize,
    pub limits: Limits,
}

impl Default for LandcoverOptions {
    fn default() -> Self {
        let p = KMeansParams::new(6);
        LandcoverOptions {
            k: 6,
            bands: None,
            indices: Vec::new(),
            scale: Scale::Zscore,
            nodata: None,
            mode: p.mode,
            beta: p.beta,
            seed: p.seed,
            restarts: p.restarts,
            max_iter: p.max_iter,
            tolerance: p.tolerance,
            shift_tolerance: p.shift_tolerance,
            sample: 2_000_000,
            limits: Limits::default(),
        }
    }
}

impl LandcoverOptions {
    fn params(&self) -> KMeansParams {
        KMeansParams::new(self.k)
            .mode(self.mode)
            .beta(self.beta)
            .seed(self.seed)
            .restarts(self.restarts)
            .max_iter(self.max_iter)
            .tolerance(self.tolerance)
            .shift_tolerance(self.shift_tolerance)
    }
}

/// Mean and standard deviation of one feature, in its own units.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FeatureStats {
    /// Band number (as text) or index name.
    pub feature: String,
    pub mean: f64,
    pub std: f64,
}

/// One class of the classes document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassReport {
    pub class: usize,
    pub pixels: u64,
    pub share: f64,
    pub area_m2: Option<f64>,
    pub hectares: Option<f64>,
    pub mean_uncertainty: f64,
    /// Display colour in the preview.
    pub hex: String,
    pub bands: Vec<FeatureStats>,
}

/// The classes document (`STEM.classes.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassesDocument {
    pub tool_version: String,
    pub input: Option<String>,
    pub caution: String,
    pub k: usize,
    pub mode: Mode,
    pub beta: Option<f64>,
    pub seed: u64,
    /// Σ over valid pixels of the squared distance (in the scaled feature space) to the
    /// nearest class mean.
    pub sse: f64,
    pub bands: Vec<usize>,
    pub indices: Vec<String>,
    pub scale: Scale,
    pub nodata: Option<f64>,
    pub valid_pixels: u64,
    pub nodata_pixels: u64,
    pub sample_pixels: usize,
    pub pixel_area_m2: Option<f64>,
    /// Value of nodata pixels in the uncertainty raster.
    pub uncertainty_nodata: f32,
    pub classes: Vec<ClassReport>,
}

/// The wording of the caution, shared by `--help`, the README and the document.
pub const CAUTION: &str =
    "unsupervised split, not a validated land-cover classification: class numbers \
carry no meaning until someone labels them; check against ground truth before any decision";

/// Feature extraction from raw band values.
#[derive(Debug, Clone)]
struct Features {
    /// 0-based bands used directly.
    bands: Vec<usize>,
    /// 0-based (a, b) of each index.
    indices: Vec<(usize, usize)>,
    nodata: Option<f32>,
    names: Vec<String>,
}

impl Features {
    fn dim(&self) -> usize {
        self.bands.len() + self.indices.len()
    }
    /// Features of one pixel into `out`; false when the pixel is nodata.
    #[inline]
    fn extract(&self, px: &[f32], out: &mut [f32]) -> bool {
        let bad = |v: f32| !v.is_finite() || self.nodata == Some(v);
        for (o, &b) in out.iter_mut().zip(&self.bands) {
            let v = px[b];
            if bad(v) {
                return false;
            }
            *o = v;
        }
        for (o, &(a, b)) in out[self.bands.len()..].iter_mut().zip(&self.indices) {
            let (va, vb) = (px[a], px[b]);
            if bad(va) || bad(vb) {
                return false;
            }
            let v = normalised_difference(va, vb);
            if !v.is_finite() {
                return false;
            }
            *o = v;
        }
        true
    }
}

/// Running mean and variance (Welford; Chan et al. to merge), deterministic in order.
#[derive(Debug, Clone, Copy, Default)]
struct Moments {
    n: f64,
    mean: f64,
    m2: f64,
}

impl Moments {
    #[inline]
    fn push(&mut self, x: f64) {
        self.n += 1.0;
        let d = x - self.mean;
        self.mean += d / self.n;
        self.m2 += d * (x - self.mean);
    }
    fn merge(&mut self, o: &Moments) {
        if o.n == 0.0 {
            return;
        }
        let n = self.n + o.n;
        let d = o.mean - self.mean;
        self.mean += d * o.n / n;
        self.m2 += o.m2 + d * d * self.n * o.n / n;
        self.n = n;
    }
    fn std(&self) -> f64 {
        if self.n > 0.0 {
            (self.m2 / self.n).sqrt()
        } else {
            0.0
        }
    }
}

/// A seeded, spatially spread sample: one pixel per `cell × cell` grid cell, at a position
/// drawn from a hash of (seed, cell), so the choice does not depend on reading order.
struct SampleGrid {
    cell: u32,
    seed: u64,
}

fn mix(mut z: u64) -> u64 {
    // SplitMix64 finaliser (Steele, Lea & Flood 2014).
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

impl SampleGrid {
    fn new(width: u32, height: u32, target: usize, seed: u64) -> Self {
        let pixels = width as f64 * height as f64;
        let cell = if target == 0 || pixels <= target as f64 {
            1
        } else {
            (pixels / target as f64).sqrt().ceil() as u32
        };
        SampleGrid { cell, seed }
    }
    /// The sampled pixel of the cell containing (x, y) equals (x, y)?
    #[inline]
    fn picks(&self, x: u32, y: u32) -> bool {
        if self.cell == 1 {
            return true;
        }
        let (cx, cy) = (x / self.cell, y / self.cell);
        let h = mix(self.seed ^ mix((cx as u64) << 32 | cy as u64));
        let ox = (h % self.cell as u64) as u32;
        let oy = ((h >> 32) % self.cell as u64) as u32;
        x == cx * self.cell + ox && y == cy * self.cell + oy
    }
}

/// Serves arbitrary consecutive row ranges from the raster's blocks.
struct RowReader<'a> {
    raster: &'a mut GeoRaster,
    next_block: usize,
    buf: Vec<f32>,
    buf_y0: u32,
    buf_rows: u32,
}

impl<'a> RowReader<'a> {
    fn new(raster: &'a mut GeoRaster) -> Self {
        RowReader {
            raster,
            next_block: 0,
            buf: Vec::new(),
            buf_y0: 0,
            buf_rows: 0,
        }
    }
    /// Rows y0..y0+rows (must follow the previous call), pixel-interleaved.
    fn rows(&mut self, y0: u32, rows: u32) -> Result<Vec<f32>> {
        let info = self.raster.info();
        let stride = info.width as usize * info.bands;
        // Drop rows before y0.
        if y0 > self.buf_y0 {
            let drop = ((y0 - self.buf_y0).min(self.buf_rows)) as usize;
            self.buf.drain(..drop * stride);
            self.buf_y0 += drop as u32;
            self.buf_rows -= drop as u32;
        }
        while self.buf_y0 + self.buf_rows < y0 + rows {
            let b = self.raster.read_block(self.next_block)?;
            self.next_block += 1;
            if self.buf_rows == 0 {
                self.buf_y0 = b.y0;
            }
            self.buf.extend_from_slice(&b.data);
            self.buf_rows += b.rows;
        }
        let out = self.buf[..rows as usize * stride].to_vec();
        self.buf.drain(..rows as usize * stride);
        self.buf_y0 += rows;
        self.buf_rows -= rows;
        Ok(out)
    }
}

/// Distinct, well-separated display colours for K classes: hues spread by the golden
/// angle in OKLab at two alternating lightness levels.
pub fn class_colours(k: usize) -> Vec<[u8; 3]> {
    (0..k)
        .map(|i| {
            let hue = (i as f64 * 137.507_764_05).to_radians();
            let l = if i % 2 == 0 { 0.62 } else { 0.80 };
            let c = 0.13;
            colour::space_to_srgb8([l, c * hue.cos(), c * hue.sin()], Space::Oklab)
        })
        .collect()
}

/// Most classes: `classes.tif` is 8-bit, with 0 for nodata.
pub const MAX_CLASSES: usize = 255;

fn check_options(opts: &LandcoverOptions, info: &RasterInfo, path: &Path) -> Result<Features> {
    let bands: Vec<usize> = match &opts.bands {
        Some(b) => b.clone(),
        None => (1..=info.bands).collect(),
    };
    if bands.is_empty() && opts.indices.is_empty() {
        return Err(ParamsError::Other("no bands selected".into()).into());
    }
    if let Some(b) = bands
        .iter()
        .enumerate()
        .find_map(|(i, b)| bands[..i].contains(b).then_some(b))
    {
        return Err(ParamsError::Other(format!("band {b} is listed twice in --bands")).into());
    }
    if let Some(ix) = opts.indices.iter().find(|ix| ix.a == ix.b) {
        return Err(ParamsError::Other(format!(
            "index {} uses band {} twice; it would be 0 everywhere",
            ix.name(),
            ix.a
        ))
        .into());
    }
    // The same pair of bands twice (in either order, under either name) is one feature
    // counted twice (or its negative).
    let pair = |a: usize, b: usize| (a.min(b), a.max(b));
    for (i, ix) in opts.indices.iter().enumerate() {
        if !opts.indices[..i]
            .iter()
            .any(|o| pair(o.a, o.b) == pair(ix.a, ix.b))
        {
            continue;
        }
        return Err(ParamsError::Other(format!(
            "index {} repeats bands {} and {} of an earlier index",
            ix.name(),
            ix.a,
            ix.b
        ))
        .into());
    }
    if opts.k > MAX_CLASSES {
        return Err(ParamsError::Other(format!(
            "k = {} classes: the 8-bit class raster holds at most {MAX_CLASSES} (0 is nodata)",
            opts.k
        ))
        .into());
    }
    for &b in &bands {
        if b == 0 || b > info.bands {
            return Err(Error::Unsupported {
                path: path.into(),
                message: format!(
                    "band {b} is out of range: the raster has {} bands",
                    info.bands
                ),
            });
        }
    }
    for ix in &opts.indices {
        for b in [ix.a, ix.b] {
            if b == 0 || b > info.bands {
                return Err(Error::Unsupported {
                    path: path.into(),
                    message: format!(
                        "index {} names band {b}, but the raster has {} bands",
                        ix.name(),
                        info.bands
                    ),
                });
            }
        }
    }
    info.geo.validate().map_err(|m| Error::Decode {
        path: path.into(),
        message: format!("inconsistent georeferencing: {m}"),
    })?;
    let mut names: Vec<String> = bands.iter().map(|b| b.to_string()).collect();
    names.extend(opts.indices.iter().map(IndexSpec::name));
    Ok(Features {
        bands: bands.iter().map(|b| b - 1).collect(),
        indices: opts.indices.iter().map(|i| (i.a - 1, i.b - 1)).collect(),
        nodata: opts.nodata.or(info.nodata).map(|v| v as f32),
        names,
    })
}

/// What [`landcover_file`] did.
#[derive(Debug, Clone)]
pub struct LandcoverReport {
    pub outputs: Vec<PathBuf>,
    pub document: ClassesDocument,
    pub seconds: f64,
}

/// Output names (exact; other tools read them).
pub fn output_names(stem: &str) -> [String; 5] {
    [
        format!("{stem}.classes.tif"),
        format!("{stem}.uncertainty.tif"),
        format!("{stem}.classes.png"),
        format!("{stem}.classes.json"),
        format!("{stem}.classes.csv"),
    ]
}

/// Pass 1 of a scene: feature statistics over every valid pixel, and the seeded grid
/// sample of feature rows, scaled as asked (what the fit sees).
pub struct SceneSample {
    raster: GeoRaster,
    pub info: RasterInfo,
    feats: Features,
    /// Features per row.
    pub dim: usize,
    /// Scaled feature rows of the sample, `n × dim`.
    pub sample: Vec<f32>,
    /// Pixels that are not nodata.
    pub valid_pixels: u64,
    pub total_pixels: u64,
    offset: Vec<f64>,
    factor: Vec<f64>,
}

impl SceneSample {
    /// Feature names (band numbers as text, then index names).
    pub fn feature_names(&self) -> &[String] {
        &self.feats.names
    }
}

/// Opens `input`, checks the band and index options, and reads pass 1 (see
/// [`SceneSample`]). `k_needed`: the sample must hold at least this many valid pixels.
pub fn scene_sample(input: &Path, opts: &LandcoverOptions, k_needed: usize) -> Result<SceneSample> {
    let mut raster = GeoRaster::open(input, &opts.limits)?;
    let info = raster.info().clone();
    let feats = check_options(opts, &info, input)?;
    let dim = feats.dim();
    let (w, h) = (info.width, info.height);

    // Pass 1: statistics of every feature over valid pixels, and the sample.
    let grid = SampleGrid::new(w, h, opts.sample, opts.seed);
    let mut moments = vec![Moments::default(); dim];
    let mut sample: Vec<f32> = Vec::new();
    let mut valid_pixels = 0u64;
    for bi in 0..raster.block_count() {
        let block = raster.read_block(bi)?;
        let rows = block.rows as usize;
        let stride = w as usize * info.bands;
        // Per row in parallel, merged in row order: deterministic.
        let per_row: Vec<(Vec<Moments>, Vec<f32>, u64)> = (0..rows)
            .into_par_iter()
            .map(|r| {
                let y = block.y0 + r as u32;
                let mut m = vec![Moments::default(); dim];
                let mut s = Vec::new();
                let mut f = vec![0.0f32; dim];
                let mut n = 0u64;
                for x in 0..w as usize {
                    let px =
                        &block.data[r * stride + x * info.bands..r * stride + (x + 1) * info.bands];
                    if !feats.extract(px, &mut f) {
                        continue;
                    }
                    n += 1;
                    for (mm, &v) in m.iter_mut().zip(&f) {
                        mm.push(v as f64);
                    }
                    if grid.picks(x as u32, y) {
                        s.extend_from_slice(&f);
                    }
                }
                (m, s, n)
            })
            .collect();
        for (m, s, n) in per_row {
            for (a, b) in moments.iter_mut().zip(&m) {
                a.merge(b);
            }
            sample.extend_from_slice(&s);
            valid_pixels += n;
        }
    }
    let total_pixels = w as u64 * h as u64;
    if valid_pixels == 0 {
        return Err(Error::InputData {
            path: input.into(),
            message: "every pixel is nodata; there is nothing to classify".into(),
        });
    }
    let sample_n = sample.len() / dim;
    if sample_n < k_needed {
        return Err(Error::InputData {
            path: input.into(),
            message: format!(
                "K = {k_needed} is more than the {sample_n} valid pixels in the fitting \
                 sample ({valid_pixels} valid in the scene; see --sample)"
            ),
        });
    }
    // Scaling.
    let (offset, factor): (Vec<f64>, Vec<f64>) = match opts.scale {
        Scale::None => (vec![0.0; dim], vec![1.0; dim]),
        Scale::Zscore => moments
            .iter()
            .map(|m| (m.mean, if m.std() > 0.0 { 1.0 / m.std() } else { 1.0 }))
            .unzip(),
    };
    let scale_row = |f: &mut [f32]| {
        for d in 0..f.len() {
            f[d] = ((f[d] as f64 - offset[d]) * factor[d]) as f32;
        }
    };
    sample.par_chunks_mut(dim).for_each(scale_row);
    Ok(SceneSample {
        raster,
        info,
        feats,
        dim,
        sample,
        valid_pixels,
        total_pixels,
        offset,
        factor,
    })
}

/// Runs the whole workflow on a file and writes all outputs atomically.
pub fn landcover_file(
    input: &Path,
    out_dir: &Path,
    opts: &LandcoverOptions,
) -> Result<LandcoverReport> {
    let t0 = Instant::now();
    let mut phases = crate::trace::Phases::start("landcover");
    let params = opts.params().check()?;
    let stem = crate::reduce::stem_of(input)?;
    let SceneSample {
        mut raster,
        info,
        feats,
        dim,
        sample,
        valid_pixels,
        total_pixels,
        offset,
        factor,
    } = scene_sample(input, opts, opts.k)?;
    let (w, h) = (info.width, info.height);
    let sample_n = sample.len() / dim;
    let scale_row = |f: &mut [f32]| {
        for d in 0..f.len() {
            f[d] = ((f[d] as f64 - offset[d]) * factor[d]) as f32;
        }
    };
    phases.mark("pass 1 (statistics, sample)");
    let data = Dataset::new(&sample, dim, None)?;
    let model = fit(&data, &params)?;
    phases.mark("fit");
    let k = model.k();
    // Class numbers: largest share of the sample first.
    let sample_labels = model.predict(&data);
    let mut counts = vec![0u64; k];
    for &l in &sample_labels {
        counts[l as usize] += 1;
    }
    let mut order: Vec<usize> = (0..k).collect();
    order.sort_by(|&a, &b| counts[b].cmp(&counts[a]).then(a.cmp(&b)));
    let mut class_of = vec![0u8; k];
    for (c, &j) in order.iter().enumerate() {
        class_of[j] = (c + 1) as u8;
    }
    let means = model.means.clone();
    let beta = model.beta;
    drop(sample);

    let mut set = OutputSet::prepare(out_dir, &[input])?;
    let names = output_names(&stem);
    for n in &names {
        set.check_target(n)?;
    }

    // Assigns rows of raw pixels: class (0 = nodata) and uncertainty per pixel.
    let assign_rows = |raw: &[f32]| -> (Vec<u8>, Vec<f32>, Vec<f32>) {
        let n = raw.len() / info.bands;
        let mut feat = vec![0.0f32; n * dim];
        let mut ok = vec![false; n];
        feat.par_chunks_mut(dim)
            .zip(ok.par_iter_mut())
            .enumerate()
            .with_min_len(1024)
            .for_each(|(p, (f, o))| {
                *o = feats.extract(&raw[p * info.bands..(p + 1) * info.bands], f);
                if *o {
                    scale_row(f);
                } else {
                    f.iter_mut().for_each(|v| *v = 0.0);
                }
            });
        let ds = Dataset::new(&feat, dim, None).expect("finite features");
        let a = soft_assign(&ds, &means, beta);
        let classes: Vec<u8> = (0..n)
            .map(|p| {
                if ok[p] {
                    class_of[a.labels[p] as usize]
                } else {
                    0
                }
            })
            .collect();
        let unc: Vec<f32> = (0..n)
            .map(|p| {
                if ok[p] {
                    a.entropy[p]
                } else {
                    UNCERTAINTY_NODATA
                }
            })
            .collect();
        (classes, unc, feat)
    };

    // Pass 2: class raster, statistics per class, the preview.
    let preview_step = (w.max(h) as usize).div_ceil(2048).max(1) as u32;
    let (pw, ph) = (w.div_ceil(preview_step), h.div_ceil(preview_step));
    let mut preview = vec![0u8; (pw * ph) as usize];
    let mut class_moments = vec![vec![Moments::default(); dim]; k + 1];
    let mut class_pixels = vec![0u64; k + 1];
    let mut class_unc = vec![0.0f64; k + 1];
    let mut sse = 0.0f64;
    let mut unc_out_slot: Option<PendingOutput> = None;
    {
        let mut reader = RowReader::new(&mut raster);
        let mut next = |y0: u32, rows: u32| -> Result<(Vec<u8>, Vec<f32>)> {
            let raw = reader.rows(y0, rows)?;
            let (classes, unc, feat) = assign_rows(&raw);
            for y in (y0..y0 + rows).filter(|y| y % preview_step == 0) {
                for x in (0..w).step_by(preview_step as usize) {
                    let p = ((y - y0) * w + x) as usize;
                    preview[((y / preview_step) * pw + x / preview_step) as usize] = classes[p];
                }
            }
            // Statistics per row in parallel, merged in row order (deterministic).
            type RowStats = (Vec<Vec<Moments>>, Vec<u64>, Vec<f64>, f64);
            let per_row: Vec<RowStats> = (0..rows as usize)
                .into_par_iter()
                .map(|r| {
                    let mut cm = vec![vec![Moments::default(); dim]; k + 1];
                    let mut cp = vec![0u64; k + 1];
                    let mut cu = vec![0.0f64; k + 1];
                    let mut s = 0.0f64;
                    let mut f = vec![0.0f32; dim];
                    for x in 0..w as usize {
                        let p = r * w as usize + x;
                        let c = classes[p] as usize;
                        if c == 0 {
                            continue;
                        }
                        cp[c] += 1;
                        cu[c] += unc[p] as f64;
                        feats.extract(&raw[p * info.bands..(p + 1) * info.bands], &mut f);
                        for (m, &v) in cm[c].iter_mut().zip(&f) {
                            m.push(v as f64);
                        }
                        let j = order[c - 1];
                        let fe = &feat[p * dim..(p + 1) * dim];
                        s += (0..dim)
                            .map(|d| (fe[d] as f64 - means[j * dim + d]).powi(2))
                            .sum::<f64>();
                    }
                    (cm, cp, cu, s)
                })
                .collect();
            for (cm, cp, cu, s) in per_row {
                for c in 1..=k {
                    class_pixels[c] += cp[c];
                    class_unc[c] += cu[c];
                    for (a, b) in class_moments[c].iter_mut().zip(&cm[c]) {
                        a.merge(b);
                    }
                }
                sse += s;
            }
            Ok((classes, unc))
        };
        // The uncertainty raster is written on a second thread from rows this pass sends
        // over a bounded channel, so the scene is read and assigned once.
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<f32>>(4);
        let mut unc_out = set.begin(&names[1])?;
        let mut cls_out = set.begin(&names[0])?;
        let geo = &info.geo;
        let unc_result = std::thread::scope(|scope| -> Result<()> {
            let writer = scope.spawn(move || -> Result<PendingOutput> {
                let mut buf: Vec<f32> = Vec::new();
                let mut pull = |_y0: u32, rows: u32| -> Result<Vec<f32>> {
                    let need = rows as usize * w as usize;
                    while buf.len() < need {
                        let more = rx
                            .recv()
                            .map_err(|_| Error::Data("the class pass stopped early".into()))?;
                        buf.extend_from_slice(&more);
                    }
                    Ok(buf.drain(..need).collect())
                };
                let nodata = format!("{UNCERTAINTY_NODATA}");
                let mut result = Ok(());
                unc_out.write_with(|wr| {
                    result = geotiff::write_f32_band(wr, w, h, geo, Some(&nodata), &mut pull);
                    Ok(())
                })?;
                result.map(|_| unc_out)
            });
            let mut send = |y0: u32, rows: u32| -> Result<Vec<u8>> {
                let (classes, unc) = next(y0, rows)?;
                tx.send(unc)
                    .map_err(|_| Error::Data("the uncertainty writer stopped early".into()))?;
                Ok(classes)
            };
            let mut result = Ok(());
            cls_out.write_with(|wr| {
                result = geotiff::write_u8_band(wr, w, h, geo, Some("0"), &mut send);
                Ok(())
            })?;
            drop(tx);
            let unc_done = writer.join().expect("uncertainty writer thread");
            // When one side fails the other only sees the channel close: report the cause
            // (a full disk, say), not that the other side stopped early.
            let stopped = |e: &Error| matches!(e, Error::Data(m) if m.ends_with("stopped early"));
            match (result, unc_done) {
                (Ok(()), Ok(u)) => unc_out_slot = Some(u),
                (Err(e), Err(u)) if stopped(&e) && !stopped(&u) => return Err(u),
                (Err(e), _) => return Err(e),
                (Ok(()), Err(u)) => return Err(u),
            }
            Ok(())
        });
        unc_result?;
        set.finish(cls_out)?;
        set.finish(unc_out_slot.take().expect("uncertainty written"))?;
    }
    phases.mark("pass 2 (classes, statistics)");
    let colours = class_colours(k);
    let pixel_area = info.geo.pixel_area_m2();
    let classes: Vec<ClassReport> = (1..=k)
        .map(|c| ClassReport {
            class: c,
            pixels: class_pixels[c],
            share: class_pixels[c] as f64 / valid_pixels as f64,
            area_m2: pixel_area.map(|a| a * class_pixels[c] as f64),
            hectares: pixel_area.map(|a| a * class_pixels[c] as f64 / 10_000.0),
            mean_uncertainty: if class_pixels[c] > 0 {
                class_unc[c] / class_pixels[c] as f64
            } else {
                0.0
            },
            hex: colour::hex(colours[c - 1]),
            bands: class_moments[c]
                .iter()
                .zip(&feats.names)
                .map(|(m, n)| FeatureStats {
                    feature: n.clone(),
                    mean: m.mean,
                    std: m.std(),
                })
                .collect(),
        })
        .collect();
    let document = ClassesDocument {
        tool_version: crate::TOOL_VERSION.into(),
        input: input.file_name().map(|n| n.to_string_lossy().into_owned()),
        caution: CAUTION.into(),
        k,
        mode: opts.mode,
        beta,
        seed: opts.seed,
        sse,
        bands: feats.bands.iter().map(|b| b + 1).collect(),
        indices: opts.indices.iter().map(IndexSpec::name).collect(),
        scale: opts.scale,
        nodata: feats.nodata.map(|v| v as f64),
        valid_pixels,
        nodata_pixels: total_pixels - valid_pixels,
        sample_pixels: sample_n,
        pixel_area_m2: pixel_area,
        uncertainty_nodata: UNCERTAINTY_NODATA,
        classes,
    };
    let rgb = preview_with_legend(&preview, pw, ph, &colours);
    let legend_h = rgb.len() as u32 / 3 / pw.max(LEGEND_MIN_WIDTH) - ph;
    set.write(&names[2], |wr| {
        raster::write_rgb_png(wr, pw.max(LEGEND_MIN_WIDTH), ph + legend_h, &rgb)
    })?;
    let json = serde_json::to_string_pretty(&document).expect("document serialises");
    set.write_bytes(&names[3], format!("{json}\n").as_bytes())?;
    set.write_bytes(&names[4], classes_csv(&document).as_bytes())?;
    let outputs = set.commit()?;
    Ok(LandcoverReport {
        outputs,
        document,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// The classes as CSV: one row per class, per-feature mean and std columns.
pub fn classes_csv(doc: &ClassesDocument) -> String {
    let mut s = String::from("class,pixels,share,area_m2,hectares,mean_uncertainty");
    if let Some(c) = doc.classes.first() {
        for f in &c.bands {
            // Column names stay CSV-safe: `ndvi:3,4` becomes `ndvi_3_4`.
            let n: String = f
                .feature
                .chars()
                .map(|ch| if ch.is_alphanumeric() { ch } else { '_' })
                .collect();
            s.push_str(&format!(",mean_{n},std_{n}"));
        }
    }
    s.push('\n');
    let opt = |v: Option<f64>| v.map(|x| format!("{x:.4}")).unwrap_or_default();
    for c in &doc.classes {
        s.push_str(&format!(
            "{},{},{:.6},{},{},{:.6}",
            c.class,
            c.pixels,
            c.share,
            opt(c.area_m2),
            opt(c.hectares),
            c.mean_uncertainty
        ));
        for f in &c.bands {
            s.push_str(&format!(",{:.6},{:.6}", f.mean, f.std));
        }
        s.push('\n');
    }
    s
}

const LEGEND_MIN_WIDTH: u32 = 64;

/// 3 × 5 digit glyphs, one row of 3 bits per line (our own drawing).
const DIGITS: [[u8; 5]; 10] = [
    [7, 5, 5, 5, 7],
    [2, 6, 2, 2, 7],
    [7, 1, 7, 4, 7],
    [7, 1, 7, 1, 7],
    [5, 5, 7, 1, 1],
    [7, 4, 7, 1, 7],
    [7, 4, 7, 5, 7],
    [7, 1, 1, 1, 1],
    [7, 5, 7, 5, 7],
    [7, 5, 7, 1, 7],
];

/// The preview (class colours; nodata black) with a legend strip below: one swatch per
/// class with its number.
pub fn preview_with_legend(classes: &[u8], w: u32, h: u32, colours: &[[u8; 3]]) -> Vec<u8> {
    let width = w.max(LEGEND_MIN_WIDTH) as usize;
    let sw = 28usize; // swatch cell width
    let per_row = (width / sw).max(1);
    let legend_rows = colours.len().div_ceil(per_row).max(1);
    let legend_h = legend_rows * 24 + 4;
    let height = h as usize + legend_h;
    let mut rgb = vec![255u8; width * height * 3];
    for y in 0..h as usize {
        for x in 0..w as usize {
            let c = classes[y * w as usize + x] as usize;
            let col = if c == 0 { [0, 0, 0] } else { colours[c - 1] };
            rgb[(y * width + x) * 3..(y * width + x) * 3 + 3].copy_from_slice(&col);
        }
    }
    let mut put = |x: usize, y: usize, c: [u8; 3]| {
        if x < width && y < height {
            rgb[(y * width + x) * 3..(y * width + x) * 3 + 3].copy_from_slice(&c);
        }
    };
    for (i, col) in colours.iter().enumerate() {
        let x0 = (i % per_row) * sw + 2;
        let y0 = h as usize + 4 + (i / per_row) * 24;
        for y in 0..10 {
            for x in 0..10 {
                put(x0 + x, y0 + y + 2, *col);
            }
        }
        // Class number, digits scaled ×2, to the right of the swatch.
        let label = (i + 1).to_string();
        for (di, ch) in label.bytes().enumerate() {
            let g = DIGITS[(ch - b'0') as usize];
            for (gy, bits) in g.iter().enumerate() {
                for gx in 0..3 {
                    if bits & (4 >> gx) != 0 {
                        for sy in 0..2 {
                            for sx in 0..2 {
                                put(
                                    x0 + 12 + di * 8 + gx * 2 + sx,
                                    y0 + 2 + gy * 2 + sy,
                                    [0, 0, 0],
                                );
                            }
                        }
                    }
                }
            }
        }
    }
    rgb
}

#[cfg(test)]
mod tests {
    use super::*;

    /// NDVI of known reflectances: red 0.1, NIR 0.5 → 0.4 / 0.6 = 0.6667 (Rouse et al. 1974
    /// definition); bare soil-like red 0.3, NIR 0.35 → 0.0769.
    #[test]
    fn ndvi_of_known_reflectances() {
        assert!((normalised_difference(0.1, 0.5) - 0.666_666_7).abs() < 1e-6);
        assert!((normalised_difference(0.3, 0.35) - 0.076_923_08).abs() < 1e-6);
        assert!(normalised_difference(0.0, 0.0).is_nan());
    }

    #[test]
    fn index_and_band_specs_parse() {
        let i: IndexSpec = "ndvi:3,4".parse().unwrap();
        assert_eq!((i.kind.as_str(), i.a, i.b), ("ndvi", 3, 4));
        assert!("ndwi:3,4".parse::<IndexSpec>().is_err());
        assert!("ndvi:3".parse::<IndexSpec>().is_err());
        assert!("ndvi:0,2".parse::<IndexSpec>().is_err());
        assert_eq!(parse_bands("2, 3,4,8").unwrap(), vec![2, 3, 4, 8]);
        assert!(parse_bands("2,x").is_err());
        assert!(parse_bands("0").is_err());
    }

    #[test]
    fn moments_merge_equals_one_pass() {
        let xs: Vec<f64> = (0..1000)
            .map(|i| ((i * 37) % 101) as f64 * 1.5 + 1e4)
            .collect();
        let mut one = Moments::default();
        xs.iter().for_each(|&x| one.push(x));
        let mut a = Moments::default();
        let mut b = Moments::default();
        xs[..300].iter().for_each(|&x| a.push(x));
        xs[300..].iter().for_each(|&x| b.push(x));
        a.merge(&b);
        assert!((a.mean - one.mean).abs() < 1e-9 && (a.std() - one.std()).abs() < 1e-9);
    }

    #[test]
    fn sample_grid_picks_one_pixel_per_cell() {
        let g = SampleGrid::new(100, 100, 100, 7);
        assert_eq!(g.cell, 10);
        let picked = (0..100u32)
            .flat_map(|y| (0..100u32).map(move |x| (x, y)))
            .filter(|&(x, y)| g.picks(x, y))
            .count();
        assert_eq!(picked, 100);
        let all = SampleGrid::new(10, 10, 1000, 7);
        assert!(all.picks(3, 4));
    }

    #[test]
    fn class_colours_are_distinct() {
        let c = class_colours(16);
        for i in 0..16 {
            for j in 0..i {
                let d = colour::delta_e2000(colour::srgb8_to_lab(c[i]), colour::srgb8_to_lab(c[j]));
                assert!(d > 5.0, "classes {i} and {j} too alike: ΔE2000 {d}");
            }
        }
    }
}
