//! Multi-band scenes as the engine sees them: band and index features, nodata, scaling,
//! and pass 1 of a scene (feature statistics and a seeded, spatially spread sample).

use crate::error::{Error, ParamsError, Result};
use crate::limits::Limits;
use crate::raster::geotiff::{GeoRaster, RasterInfo};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::path::Path;

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

/// How a scene's pixels become feature rows; defaults as documented on each field.
#[derive(Debug, Clone, PartialEq)]
pub struct SceneOptions {
    /// Bands to use (1-based); default all.
    pub bands: Option<Vec<usize>>,
    /// Normalised-difference indices added as features.
    pub indices: Vec<IndexSpec>,
    /// Feature scaling. Default: z-score.
    pub scale: Scale,
    /// Nodata value; default: the file's GDAL_NODATA tag, if any.
    pub nodata: Option<f64>,
    /// Pixels in the fitting sample (seeded, one per grid cell). Default: 2 000 000.
    pub sample: usize,
    /// A raster on the scene's grid whose non-zero pixels are left out (for example a cloud
    /// mask); refused when it is not on the same grid. Default: none.
    pub exclude: Option<std::path::PathBuf>,
}

impl Default for SceneOptions {
    fn default() -> Self {
        SceneOptions {
            bands: None,
            indices: Vec::new(),
            scale: Scale::Zscore,
            nodata: None,
            sample: 2_000_000,
            exclude: None,
        }
    }
}

/// Feature extraction from raw band values.
#[derive(Debug, Clone)]
pub(crate) struct Features {
    /// 0-based bands used directly.
    pub(crate) bands: Vec<usize>,
    /// 0-based (a, b) of each index.
    indices: Vec<(usize, usize)>,
    pub(crate) nodata: Option<f32>,
    pub(crate) names: Vec<String>,
    /// Per raw band: physical value = stored × scale + offset (GDAL_METADATA).
    scale_offset: Vec<(f64, f64)>,
}

/// The value an index takes where it is undefined (both bands 0 after scale and offset): the
/// middle of its range, "no difference". The pixel stays valid and is classed on this value
/// and its other features; such pixels are counted.
pub const UNDEFINED_INDEX_VALUE: f32 = 0.0;

impl Features {
    pub(crate) fn dim(&self) -> usize {
        self.bands.len() + self.indices.len()
    }
    /// The physical value of raw band `b` (0-based) of a stored value.
    #[inline]
    fn physical(&self, b: usize, v: f32) -> f32 {
        match self.scale_offset.get(b) {
            Some(&(s, o)) if (s, o) != (1.0, 0.0) => (v as f64 * s + o) as f32,
            _ => v,
        }
    }

    /// Features of one pixel into `out` (bands after scale and offset, then indices of the
    /// scaled bands; an undefined index takes [`UNDEFINED_INDEX_VALUE`]); false when the
    /// pixel is nodata (a band used is not finite or equals the stored no-data value).
    #[inline]
    pub(crate) fn extract(&self, px: &[f32], out: &mut [f32]) -> bool {
        let bad = |v: f32| !v.is_finite() || self.nodata == Some(v);
        for (o, &b) in out.iter_mut().zip(&self.bands) {
            let v = px[b];
            if bad(v) {
                return false;
            }
            *o = self.physical(b, v);
        }
        for (o, &(a, b)) in out[self.bands.len()..].iter_mut().zip(&self.indices) {
            let (va, vb) = (px[a], px[b]);
            if bad(va) || bad(vb) {
                return false;
            }
            let v = normalised_difference(self.physical(a, va), self.physical(b, vb));
            *o = if v.is_finite() {
                v
            } else {
                UNDEFINED_INDEX_VALUE
            };
        }
        true
    }

    /// The description of each feature (the band's GDAL description; `None` for indices).
    pub(crate) fn descriptions(&self, info: &RasterInfo) -> Vec<Option<String>> {
        let mut d: Vec<Option<String>> = self
            .bands
            .iter()
            .map(|&b| info.descriptions.get(b).cloned().flatten())
            .collect();
        d.extend(self.indices.iter().map(|_| None));
        d
    }

    /// True when some index of a valid pixel is undefined (its two bands sum to 0).
    #[inline]
    pub(crate) fn undefined_index(&self, px: &[f32]) -> bool {
        self.indices.iter().any(|&(a, b)| {
            !normalised_difference(self.physical(a, px[a]), self.physical(b, px[b])).is_finite()
        })
    }
}

/// Running mean and variance (Welford; Chan et al. to merge), deterministic in order.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct Moments {
    pub(crate) n: f64,
    pub(crate) mean: f64,
    pub(crate) m2: f64,
}

impl Moments {
    #[inline]
    pub(crate) fn push(&mut self, x: f64) {
        self.n += 1.0;
        let d = x - self.mean;
        self.mean += d / self.n;
        self.m2 += d * (x - self.mean);
    }
    pub(crate) fn merge(&mut self, o: &Moments) {
        if o.n == 0.0 {
            return;
        }
        let n = self.n + o.n;
        let d = o.mean - self.mean;
        self.mean += d * o.n / n;
        self.m2 += o.m2 + d * d * self.n * o.n / n;
        self.n = n;
    }
    pub(crate) fn std(&self) -> f64 {
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

pub(crate) fn mix(mut z: u64) -> u64 {
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
pub(crate) struct RowReader<'a> {
    raster: &'a mut GeoRaster,
    next_block: usize,
    buf: Vec<f32>,
    buf_y0: u32,
    buf_rows: u32,
}

impl<'a> RowReader<'a> {
    pub(crate) fn new(raster: &'a mut GeoRaster) -> Self {
        RowReader {
            raster,
            next_block: 0,
            buf: Vec::new(),
            buf_y0: 0,
            buf_rows: 0,
        }
    }
    /// Rows y0..y0+rows (must follow the previous call), pixel-interleaved.
    pub(crate) fn rows(&mut self, y0: u32, rows: u32) -> Result<Vec<f32>> {
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

pub(crate) fn check_options(
    opts: &SceneOptions,
    info: &RasterInfo,
    path: &Path,
) -> Result<Features> {
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
        return Err(ParamsError::Other(format!("band {b} is listed twice in `bands`")).into());
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
    Ok(Features::new(
        &bands,
        &opts.indices,
        opts.nodata.or(info.nodata),
        info.scale_offset.clone(),
    ))
}

impl Features {
    /// Features of `bands` (1-based, checked) and `indices`, with `nodata` in effect and the
    /// raw bands' `scale_offset` (empty: none).
    pub(crate) fn new(
        bands: &[usize],
        indices: &[IndexSpec],
        nodata: Option<f64>,
        scale_offset: Vec<(f64, f64)>,
    ) -> Features {
        let mut names: Vec<String> = bands.iter().map(|b| b.to_string()).collect();
        names.extend(indices.iter().map(IndexSpec::name));
        Features {
            bands: bands.iter().map(|b| b - 1).collect(),
            indices: indices.iter().map(|i| (i.a - 1, i.b - 1)).collect(),
            nodata: nodata.map(|v| v as f32),
            names,
            scale_offset,
        }
    }
}

/// Pass 1 of a scene: feature statistics over every valid pixel, and the seeded grid
/// sample of feature rows, scaled as asked (what the fit sees).
pub struct SceneSample {
    pub(crate) raster: GeoRaster,
    pub info: RasterInfo,
    pub(crate) feats: Features,
    /// Features per row.
    pub dim: usize,
    /// Scaled feature rows of the sample, `n × dim`.
    pub sample: Vec<f32>,
    /// Pixels that are not nodata.
    pub valid_pixels: u64,
    pub total_pixels: u64,
    /// Valid pixels where an index is undefined (see [`UNDEFINED_INDEX_VALUE`]).
    pub undefined_index_pixels: u64,
    /// The scaling applied to the sample, to be applied to every other row too.
    pub scaler: Scaler,
}

/// Per-feature scaling: (value − offset) × factor.
#[derive(Debug, Clone, PartialEq)]
pub struct Scaler {
    pub offset: Vec<f64>,
    pub factor: Vec<f64>,
}

impl Scaler {
    /// Scales one feature row in place.
    #[inline]
    pub fn apply(&self, row: &mut [f32]) {
        for ((v, o), f) in row.iter_mut().zip(&self.offset).zip(&self.factor) {
            *v = ((*v as f64 - o) * f) as f32;
        }
    }
}

impl SceneSample {
    /// Feature names (band numbers as text, then index names).
    pub fn feature_names(&self) -> &[String] {
        &self.feats.names
    }

    /// The description of each feature: the band's GDAL description for bands, `None` for
    /// indices.
    pub fn feature_descriptions(&self) -> Vec<Option<String>> {
        self.feats.descriptions(&self.info)
    }
}

/// Pass 1 before scaling: the open raster, its features, the statistics of every feature
/// over the valid pixels and the unscaled sample rows.
pub(crate) struct RawSample {
    pub(crate) raster: GeoRaster,
    pub(crate) info: RasterInfo,
    pub(crate) feats: Features,
    pub(crate) dim: usize,
    /// Unscaled feature rows of the sample, `n × dim`.
    pub(crate) sample: Vec<f32>,
    /// Statistics of each feature over every valid pixel.
    pub(crate) moments: Vec<Moments>,
    pub(crate) valid_pixels: u64,
    pub(crate) total_pixels: u64,
    pub(crate) undefined_index_pixels: u64,
}

/// Opens `input`, checks the band and index options, and reads pass 1 (see
/// [`SceneSample`]). `k_needed`: the sample must hold at least this many valid pixels.
pub fn scene_sample(
    input: &Path,
    opts: &SceneOptions,
    seed: u64,
    limits: &Limits,
    k_needed: usize,
) -> Result<SceneSample> {
    let RawSample {
        raster,
        info,
        feats,
        dim,
        mut sample,
        moments,
        valid_pixels,
        total_pixels,
        undefined_index_pixels,
    } = scene_pass1(input, opts, seed, limits)?;
    let sample_n = sample.len() / dim;
    if sample_n < k_needed {
        return Err(Error::InputData {
            path: input.into(),
            message: format!(
                "K = {k_needed} is more than the {sample_n} valid pixels in the fitting \
                 sample ({valid_pixels} valid in the scene; see `sample`)"
            ),
        });
    }
    let scaler = Scaler::from_moments(opts.scale, &moments);
    sample.par_chunks_mut(dim).for_each(|row| scaler.apply(row));
    Ok(SceneSample {
        raster,
        info,
        feats,
        dim,
        sample,
        valid_pixels,
        total_pixels,
        undefined_index_pixels,
        scaler,
    })
}

impl Scaler {
    /// The scaling `scale` asks for, from the statistics of every feature.
    pub(crate) fn from_moments(scale: Scale, moments: &[Moments]) -> Scaler {
        let dim = moments.len();
        let (offset, factor) = match scale {
            Scale::None => (vec![0.0; dim], vec![1.0; dim]),
            Scale::Zscore => moments
                .iter()
                .map(|m| (m.mean, if m.std() > 0.0 { 1.0 / m.std() } else { 1.0 }))
                .unzip(),
        };
        Scaler { offset, factor }
    }
}

/// Pass 1 without scaling (see [`RawSample`]); refuses a scene whose every pixel is nodata.
pub(crate) fn scene_pass1(
    input: &Path,
    opts: &SceneOptions,
    seed: u64,
    limits: &Limits,
) -> Result<RawSample> {
    let mut raster = GeoRaster::open(input, limits)?;
    if let Some(mask) = &opts.exclude {
        raster.exclude_where(mask, limits)?;
    }
    let info = raster.info().clone();
    let feats = check_options(opts, &info, input)?;
    let dim = feats.dim();
    let (w, h) = (info.width, info.height);

    // Pass 1: statistics of every feature over valid pixels, and the sample.
    let grid = SampleGrid::new(w, h, opts.sample, seed);
    let mut moments = vec![Moments::default(); dim];
    let mut sample: Vec<f32> = Vec::new();
    let mut valid_pixels = 0u64;
    let mut undefined_index_pixels = 0u64;
    for bi in 0..raster.block_count() {
        let block = raster.read_block(bi)?;
        let rows = block.rows as usize;
        let stride = w as usize * info.bands;
        // Per row in parallel, merged in row order: deterministic.
        let per_row: Vec<(Vec<Moments>, Vec<f32>, u64, u64)> = (0..rows)
            .into_par_iter()
            .map(|r| {
                let y = block.y0 + r as u32;
                let mut m = vec![Moments::default(); dim];
                let mut s = Vec::new();
                let mut f = vec![0.0f32; dim];
                let mut n = 0u64;
                let mut undefined = 0u64;
                for x in 0..w as usize {
                    let px =
                        &block.data[r * stride + x * info.bands..r * stride + (x + 1) * info.bands];
                    if !feats.extract(px, &mut f) {
                        continue;
                    }
                    n += 1;
                    undefined += feats.undefined_index(px) as u64;
                    for (mm, &v) in m.iter_mut().zip(&f) {
                        mm.push(v as f64);
                    }
                    if grid.picks(x as u32, y) {
                        s.extend_from_slice(&f);
                    }
                }
                (m, s, n, undefined)
            })
            .collect();
        for (m, s, n, undefined) in per_row {
            undefined_index_pixels += undefined;
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
    Ok(RawSample {
        raster,
        info,
        feats,
        dim,
        sample,
        moments,
        valid_pixels,
        total_pixels,
        undefined_index_pixels,
    })
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
}
