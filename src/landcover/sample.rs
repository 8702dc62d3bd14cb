//! Sample files: one raster's pass 1 (its unscaled, seeded grid sample and the statistics of
//! every feature over its valid pixels), written by one node and read by the node that fits
//! the model, so a fit across many rasters can be split into one job per raster.
//!
//! Our own binary format, version 1, all integers and floats little-endian:
//! - the 8 bytes `CSSAMPLE`, the format version (u32), the length of the header (u32);
//! - the header: UTF-8 JSON ([`SampleHeader`]);
//! - the rows: `rows × dim` f32;
//! - per feature: count, mean and sum of squared deviations (f64 each);
//! - an FNV-1a 64 checksum of everything before it (u64).

use crate::error::{Error, Result};
use crate::features::scene::{scene_pass1, Features, IndexSpec, Moments, RawSample, SceneOptions};
use crate::limits::Limits;
use crate::output::fnv1a;
use crate::raster::geotiff::RasterInfo;
use serde::{Deserialize, Serialize};
use std::path::Path;

const MAGIC: &[u8; 8] = b"CSSAMPLE";
/// The sample file format this build writes and reads.
pub const SAMPLE_FORMAT_VERSION: u32 = 1;

/// What a sample file says about its raster and how it was drawn.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SampleHeader {
    /// The raster's file name (without its folder).
    pub source: String,
    pub width: u32,
    pub height: u32,
    /// Bands of the raster (all of them, not only those used).
    pub raster_bands: usize,
    /// Stored sample type (`u8`, `u16`, `i16`, `f32`, ...).
    pub sample_type: String,
    /// Band descriptions, when the raster has them.
    pub band_descriptions: Option<Vec<String>>,
    /// Each band's scale and offset (GDAL_METADATA `SCALE`, `OFFSET`; 1 and 0 without),
    /// which turn its stored numbers into the values the features are made of. Empty in
    /// files written before it was recorded.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub band_scale_offset: Vec<(f64, f64)>,
    /// Bands used (1-based).
    pub bands: Vec<usize>,
    /// Indices added (`ndvi:3,4`, ...).
    pub indices: Vec<String>,
    /// Feature names: band numbers as text, then index names.
    pub features: Vec<String>,
    /// The nodata value asked for (`None`: the raster's own tag).
    #[serde(with = "nodata_serde")]
    pub nodata_setting: Option<f64>,
    /// The nodata value in effect for this raster.
    #[serde(with = "nodata_serde")]
    pub nodata: Option<f64>,
    /// Seed of the grid sample.
    pub seed: u64,
    /// Pixels asked for in the sample (`sample`).
    pub sample_target: usize,
    pub valid_pixels: u64,
    pub total_pixels: u64,
    /// Rows in the file (sampled valid pixels).
    pub rows: usize,
    /// Features per row.
    pub dim: usize,
}

/// One raster's sample, in memory.
#[derive(Debug, Clone)]
pub struct SceneSampleData {
    pub header: SampleHeader,
    /// Unscaled feature rows, `rows × dim`.
    pub rows: Vec<f32>,
    /// Statistics of every feature over the raster's valid pixels.
    pub(crate) moments: Vec<Moments>,
}

/// How [`sample_scene`] draws a sample.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleOptions {
    /// Bands, indices, nodata and the sample size (`scale` is the fit's business).
    pub scene: SceneOptions,
    /// Seed of the grid sample.
    pub seed: u64,
    pub limits: Limits,
}

impl SampleHeader {
    /// The header of `rows` sampled from `input` (`pixels`: valid and total).
    pub(super) fn describe(
        input: &Path,
        info: &RasterInfo,
        feats: &Features,
        opts: &SceneOptions,
        seed: u64,
        pixels: (u64, u64),
        rows: usize,
    ) -> SampleHeader {
        SampleHeader {
            source: source_name(input),
            width: info.width,
            height: info.height,
            raster_bands: info.bands,
            sample_type: info.sample.name().to_string(),
            band_descriptions: band_descriptions(info),
            band_scale_offset: info.scale_offset.clone(),
            bands: feats.bands.iter().map(|b| b + 1).collect(),
            indices: opts.indices.iter().map(IndexSpec::name).collect(),
            features: feats.names.clone(),
            nodata_setting: opts.nodata,
            nodata: feats.nodata.map(|v| v as f64),
            seed,
            sample_target: opts.sample,
            valid_pixels: pixels.0,
            total_pixels: pixels.1,
            rows,
            dim: feats.dim(),
        }
    }
}

impl SceneSampleData {
    /// The sample of a raster that pass 1 read.
    pub(crate) fn from_pass1(
        input: &Path,
        raw: RawSample,
        opts: &SceneOptions,
        seed: u64,
    ) -> SceneSampleData {
        let header = SampleHeader::describe(
            input,
            &raw.info,
            &raw.feats,
            opts,
            seed,
            (raw.valid_pixels, raw.total_pixels),
            raw.sample.len() / raw.dim,
        );
        SceneSampleData {
            header,
            rows: raw.sample,
            moments: raw.moments,
        }
    }

    /// The file's bytes.
    pub fn to_bytes(&self) -> Vec<u8> {
        let json = serde_json::to_string(&self.header).expect("header serialises");
        let mut v = Vec::with_capacity(24 + json.len() + self.rows.len() * 4);
        v.extend_from_slice(MAGIC);
        v.extend_from_slice(&SAMPLE_FORMAT_VERSION.to_le_bytes());
        v.extend_from_slice(&(json.len() as u32).to_le_bytes());
        v.extend_from_slice(json.as_bytes());
        for x in &self.rows {
            v.extend_from_slice(&x.to_le_bytes());
        }
        for m in &self.moments {
            for x in [m.n, m.mean, m.m2] {
                v.extend_from_slice(&x.to_le_bytes());
            }
        }
        let sum = fnv1a(&v);
        v.extend_from_slice(&sum.to_le_bytes());
        v
    }

    /// Reads a sample file's bytes; `path` names the file in errors.
    pub fn from_bytes(path: &Path, bytes: &[u8]) -> Result<SceneSampleData> {
        let bad = |m: &str| Error::Decode {
            path: path.into(),
            message: format!("not a usable sample file: {m}"),
        };
        if bytes.len() < 16 + 8 || &bytes[..8] != MAGIC {
            return Err(bad("it does not start with CSSAMPLE"));
        }
        let (body, tail) = bytes.split_at(bytes.len() - 8);
        if fnv1a(body) != u64::from_le_bytes(tail.try_into().expect("8 bytes")) {
            return Err(bad("checksum mismatch (damaged or cut short)"));
        }
        let version = u32::from_le_bytes(body[8..12].try_into().expect("4 bytes"));
        if version != SAMPLE_FORMAT_VERSION {
            return Err(bad(&format!(
                "format version {version}; this build reads version {SAMPLE_FORMAT_VERSION}"
            )));
        }
        let json_len = u32::from_le_bytes(body[12..16].try_into().expect("4 bytes")) as usize;
        let json = body
            .get(16..16 + json_len)
            .ok_or_else(|| bad("header runs past the end"))?;
        let header: SampleHeader = serde_json::from_slice(json)
            .map_err(|e| bad(&format!("header is not valid JSON: {e}")))?;
        let floats = header
            .rows
            .checked_mul(header.dim)
            .ok_or_else(|| bad("row count overflows"))?;
        let need = floats
            .checked_mul(4)
            .and_then(|r| r.checked_add(header.dim * 24))
            .and_then(|r| r.checked_add(16 + json_len))
            .ok_or_else(|| bad("row count overflows"))?;
        if need != body.len() || header.dim == 0 || header.features.len() != header.dim {
            return Err(bad("its length does not match its header"));
        }
        let data = &body[16 + json_len..];
        let f32_at = |i: usize| f32::from_le_bytes(data[i * 4..i * 4 + 4].try_into().expect("4"));
        let rows: Vec<f32> = (0..floats).map(f32_at).collect();
        if rows.iter().any(|v| !v.is_finite()) {
            return Err(bad("a row holds a value that is not finite"));
        }
        let m = &data[floats * 4..];
        let f64_at = |i: usize| f64::from_le_bytes(m[i * 8..i * 8 + 8].try_into().expect("8"));
        let moments = (0..header.dim)
            .map(|d| Moments {
                n: f64_at(3 * d),
                mean: f64_at(3 * d + 1),
                m2: f64_at(3 * d + 2),
            })
            .collect();
        Ok(SceneSampleData {
            header,
            rows,
            moments,
        })
    }
}

/// The raster's band descriptions (GDAL_METADATA), when it has any ("" for a band without).
pub(super) fn band_descriptions(info: &RasterInfo) -> Option<Vec<String>> {
    info.descriptions.iter().any(Option::is_some).then(|| {
        info.descriptions
            .iter()
            .map(|d| d.clone().unwrap_or_default())
            .collect()
    })
}

/// True when `bytes` start like a sample file.
pub fn is_sample_file(bytes: &[u8]) -> bool {
    bytes.starts_with(MAGIC)
}

/// The name a source is recorded by: its file name without the folder.
pub fn source_name(input: &Path) -> String {
    input
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "-".into())
}

/// Reads pass 1 of `input` as a sample (no scaling).
pub fn sample_scene(input: &Path, opts: &SampleOptions) -> Result<SceneSampleData> {
    let raw = scene_pass1(input, &opts.scene, opts.seed, &opts.limits)?;
    Ok(SceneSampleData::from_pass1(
        input,
        raw,
        &opts.scene,
        opts.seed,
    ))
}

/// Samples `input` and writes the sample file `out` (atomically; never over the input).
pub fn write_sample_file(input: &Path, out: &Path, opts: &SampleOptions) -> Result<SampleHeader> {
    let data = sample_scene(input, opts)?;
    crate::output::write_file_sparing(out, &data.to_bytes(), &[input])?;
    Ok(data.header)
}

/// Reads a sample file, with the allocation limit as the largest file accepted.
pub fn read_sample_file(path: &Path, limits: &Limits) -> Result<SceneSampleData> {
    let bytes = read_bounded(path, limits)?;
    SceneSampleData::from_bytes(path, &bytes)
}

/// A whole file, refused when it is larger than the allocation limit.
pub(super) fn read_bounded(path: &Path, limits: &Limits) -> Result<Vec<u8>> {
    let open_err = |e: std::io::Error| Error::Open {
        path: path.into(),
        source: e,
    };
    let meta = std::fs::metadata(path).map_err(open_err)?;
    if meta.len() > limits.max_alloc {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!(
                "file of {} bytes is larger than the {}-byte limit",
                meta.len(),
                limits.max_alloc
            ),
        });
    }
    std::fs::read(path).map_err(open_err)
}

/// A nodata value in JSON: a number, or the string `"nan"` (JSON has no NaN).
pub(super) mod nodata_serde {
    use serde::{Deserialize, Deserializer, Serialize, Serializer};

    #[derive(Serialize, Deserialize)]
    #[serde(untagged)]
    enum Repr {
        Number(f64),
        Text(String),
    }

    pub fn serialize<S: Serializer>(v: &Option<f64>, s: S) -> Result<S::Ok, S::Error> {
        match v {
            Some(x) if x.is_finite() => Some(Repr::Number(*x)).serialize(s),
            Some(x) => Some(Repr::Text(format!("{x}").to_ascii_lowercase())).serialize(s),
            None => None::<Repr>.serialize(s),
        }
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
        match Option::<Repr>::deserialize(d)? {
            None => Ok(None),
            Some(Repr::Number(x)) => Ok(Some(x)),
            Some(Repr::Text(t)) => t
                .parse::<f64>()
                .map(Some)
                .map_err(|_| serde::de::Error::custom(format!("'{t}' is not a nodata value"))),
        }
    }
}
