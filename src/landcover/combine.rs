//! One model from many rasters: each raster's sample (read from a sample file, or drawn
//! here exactly as `sample_scene` draws it) is gathered in the order given, the feature
//! statistics are merged in that order, an optional seeded thinning keeps the fit to
//! `fit_rows` rows, and the classes are fitted on the scaled rows. Sample files and rasters
//! give the same bytes, so a fit split into one job per raster equals a fit on one machine.

use super::fit::FittedClasses;
use super::model::{LandcoverModel, ModelSource};
use super::sample::{is_sample_file, read_sample_file, sample_scene, SampleOptions};
use super::sample::{SampleHeader, SceneSampleData};
use crate::cluster::EngineOptions;
use crate::error::{Error, ParamsError, Result};
use crate::features::scene::{mix, Features, IndexSpec, Moments, Scaler, SceneOptions};
use crate::limits::Limits;
use rayon::prelude::*;
use std::io::Read;
use std::path::{Path, PathBuf};

/// Settings of a fit across several rasters or sample files.
#[derive(Debug, Clone, PartialEq)]
pub struct FitModelOptions {
    /// Classes (1 to 255).
    pub k: usize,
    /// Bands, indices, nodata and sample size for raster inputs (sample files carry their
    /// own, which must agree with any given here), and the scaling of the fit.
    pub scene: SceneOptions,
    pub engine: EngineOptions,
    /// Most rows the fit runs on; a larger combined sample is thinned by a seeded draw.
    pub fit_rows: usize,
    pub limits: Limits,
}

impl Default for FitModelOptions {
    fn default() -> Self {
        FitModelOptions {
            k: 6,
            scene: SceneOptions::default(),
            engine: EngineOptions::default(),
            fit_rows: 2_000_000,
            limits: Limits::with_max_pixels(super::MAX_SCENE_PIXELS),
        }
    }
}

/// Reads one input: a sample file (by its first bytes) or a raster to sample.
fn load_input(path: &Path, opts: &FitModelOptions) -> Result<SceneSampleData> {
    let mut head = [0u8; 8];
    let n = std::fs::File::open(path)
        .and_then(|mut f| f.read(&mut head))
        .map_err(|e| Error::Open {
            path: path.into(),
            source: e,
        })?;
    if is_sample_file(&head[..n]) {
        let s = read_sample_file(path, &opts.limits)?;
        check_given(path, &s.header, &opts.scene)?;
        return Ok(s);
    }
    let sample_opts = SampleOptions {
        scene: opts.scene.clone(),
        seed: opts.engine.seed,
        limits: opts.limits,
    };
    sample_scene(path, &sample_opts)
}

/// Settings given for raster inputs must agree with what a sample file records.
fn check_given(path: &Path, h: &SampleHeader, scene: &SceneOptions) -> Result<()> {
    let refuse = |what: &str, file: String, asked: String| {
        Err(Error::InputData {
            path: path.into(),
            message: format!(
                "this sample was drawn with `{what}` {file}, but the fit asks for {asked}"
            ),
        })
    };
    if let Some(b) = &scene.bands {
        if *b != h.bands {
            return refuse("bands", format!("{:?}", h.bands), format!("{b:?}"));
        }
    }
    let indices: Vec<String> = scene.indices.iter().map(IndexSpec::name).collect();
    if !indices.is_empty() && indices != h.indices {
        return refuse("index", format!("{:?}", h.indices), format!("{indices:?}"));
    }
    if scene.nodata.is_some()
        && scene.nodata.map(f64::to_bits) != h.nodata_setting.map(f64::to_bits)
    {
        return refuse(
            "nodata",
            format!("{:?}", h.nodata_setting),
            format!("{:?}", scene.nodata),
        );
    }
    Ok(())
}

/// Every sample must agree with the first on what was sampled and how.
fn check_same(path: &Path, first: &SampleHeader, h: &SampleHeader, seed: u64) -> Result<()> {
    let differ = |what: &str, a: String, b: String| {
        Err(Error::InputData {
            path: path.into(),
            message: format!("its {what} ({b}) differs from the first input's ({a})"),
        })
    };
    if h.seed != seed {
        return Err(Error::InputData {
            path: path.into(),
            message: format!(
                "this sample was drawn with seed {}, but the fit uses seed {seed} (`seed`)",
                h.seed
            ),
        });
    }
    if h.raster_bands != first.raster_bands {
        return differ(
            "band count",
            first.raster_bands.to_string(),
            h.raster_bands.to_string(),
        );
    }
    if h.sample_type != first.sample_type {
        return differ(
            "sample type",
            first.sample_type.clone(),
            h.sample_type.clone(),
        );
    }
    if h.features != first.features {
        return differ(
            "features",
            format!("{:?}", first.features),
            format!("{:?}", h.features),
        );
    }
    if h.band_descriptions != first.band_descriptions {
        return differ(
            "band descriptions",
            format!("{:?}", first.band_descriptions),
            format!("{:?}", h.band_descriptions),
        );
    }
    if h.band_scale_offset != first.band_scale_offset {
        return differ(
            "band scale and offset",
            format!("{:?}", first.band_scale_offset),
            format!("{:?}", h.band_scale_offset),
        );
    }
    if h.nodata_setting.map(f64::to_bits) != first.nodata_setting.map(f64::to_bits) {
        return differ(
            "`nodata` setting",
            format!("{:?}", first.nodata_setting),
            format!("{:?}", h.nodata_setting),
        );
    }
    if h.sample_target != first.sample_target {
        return differ(
            "`sample` size",
            first.sample_target.to_string(),
            h.sample_target.to_string(),
        );
    }
    Ok(())
}

/// Fits one model on `inputs` (sample files or rasters, in this order).
pub fn fit_model(inputs: &[PathBuf], opts: &FitModelOptions) -> Result<LandcoverModel> {
    if inputs.is_empty() {
        return Err(ParamsError::Other("no inputs to fit on".into()).into());
    }
    if opts.fit_rows == 0 {
        return Err(ParamsError::Other("`fit_rows` must be at least 1".into()).into());
    }
    let params = opts.engine.params(opts.k).check()?;
    if opts.k > super::MAX_CLASSES {
        return Err(ParamsError::KTooLarge {
            got: opts.k,
            max: super::MAX_CLASSES,
            why: ": the 8-bit class raster numbers classes 1 to 255 (0 is nodata)",
        }
        .into());
    }
    let mut first: Option<SampleHeader> = None;
    let mut moments: Vec<Moments> = Vec::new();
    let mut rows: Vec<f32> = Vec::new();
    let mut sources = Vec::with_capacity(inputs.len());
    let mut per_source_rows = Vec::with_capacity(inputs.len());
    for path in inputs {
        let s = load_input(path, opts)?;
        let h = &s.header;
        match &first {
            None => {
                if h.seed != opts.engine.seed {
                    check_same(path, h, h, opts.engine.seed)?;
                }
                moments = vec![Moments::default(); h.dim];
                first = Some(h.clone());
            }
            Some(f) => check_same(path, f, h, opts.engine.seed)?,
        }
        for (a, b) in moments.iter_mut().zip(&s.moments) {
            a.merge(b);
        }
        rows.extend_from_slice(&s.rows);
        per_source_rows.push(h.rows);
        sources.push(ModelSource {
            name: h.source.clone(),
            width: h.width,
            height: h.height,
            valid_pixels: h.valid_pixels,
            sample_rows: h.rows,
        });
    }
    let first = first.expect("at least one input");
    let dim = first.dim;
    let rows = thin(rows, dim, &per_source_rows, opts.fit_rows, opts.engine.seed);
    let n = rows.len() / dim;
    if n < opts.k {
        return Err(Error::InputData {
            path: inputs[0].clone(),
            message: format!(
                "K = {} is more than the {n} valid pixels in the samples of all inputs \
                 (see `sample`)",
                opts.k
            ),
        });
    }
    let scaler = Scaler::from_moments(opts.scene.scale, &moments);
    let mut rows = rows;
    rows.par_chunks_mut(dim).for_each(|r| scaler.apply(r));
    let feats = features_of(&first);
    let (classes, summary) =
        FittedClasses::fit(&rows, dim, feats, scaler, first.raster_bands, &params, None)?;
    Ok(LandcoverModel::build(
        &classes,
        &summary,
        &first,
        opts.scene.scale,
        opts.engine,
        sources,
    ))
}

/// The features a sample header describes (nodata as set; each raster applies its own).
fn features_of(h: &SampleHeader) -> Features {
    let indices: Vec<IndexSpec> = h.indices.iter().filter_map(|s| s.parse().ok()).collect();
    Features::new(&h.bands, &indices, h.nodata_setting, Vec::new())
}

/// Keeps exactly `keep` of the rows (all when there are no more), chosen by a seeded hash
/// of (source, row) so the choice depends only on the inputs and the seed; kept rows stay
/// in their order.
fn thin(rows: Vec<f32>, dim: usize, per_source: &[usize], keep: usize, seed: u64) -> Vec<f32> {
    let n = rows.len() / dim;
    if n <= keep {
        return rows;
    }
    let mut keys: Vec<(u64, u32, u32)> = Vec::with_capacity(n);
    for (s, &count) in per_source.iter().enumerate() {
        for r in 0..count {
            let k = mix(seed ^ mix(((s as u64) << 32) | r as u64).rotate_left(17));
            keys.push((k, s as u32, r as u32));
        }
    }
    let mut sorted = keys.clone();
    sorted.select_nth_unstable(keep - 1);
    let cut = sorted[keep - 1];
    let mut out = Vec::with_capacity(keep * dim);
    for (i, key) in keys.iter().enumerate() {
        if *key <= cut {
            out.extend_from_slice(&rows[i * dim..(i + 1) * dim]);
        }
    }
    out
}

/// Reads a list file: one path per line; blank lines and lines starting with `#` skipped;
/// relative paths are taken as they are (relative to the current folder).
pub fn read_list_file(path: &Path, limits: &Limits) -> Result<Vec<PathBuf>> {
    let text = limits.read_text(path, "list of inputs")?;
    Ok(text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with('#'))
        .map(PathBuf::from)
        .collect())
}
