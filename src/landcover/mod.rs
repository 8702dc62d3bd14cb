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

use crate::output::DocumentHeader;
use crate::cluster::{fit, soft_assign, Dataset, EngineOptions, KMeansParams, Mode};
use crate::colour::{self, Space};
use crate::error::{Error, ParamsError, Result};
pub use crate::features::scene::{normalised_difference, parse_bands, IndexSpec, Scale, SceneOptions};
use crate::features::scene::{scene_sample, Moments, RowReader, SceneSample};
use crate::raster::geotiff;
use crate::limits::Limits;
use crate::output::{OutputSet, PendingOutput};
use crate::raster;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Value written to the uncertainty raster where the class raster has nodata (class 0).
pub const UNCERTAINTY_NODATA: f32 = -1.0;

/// Settings of a land-cover split.
#[derive(Debug, Clone, PartialEq)]
pub struct LandcoverOptions {
    /// Classes (at least 1, at most [`MAX_CLASSES`]). Default: 6.
    pub k: usize,
    /// How pixels become feature rows (bands, indices, scaling, nodata, sample).
    pub scene: SceneOptions,
    /// The k-means engine's settings.
    pub engine: EngineOptions,
    pub limits: Limits,
}

impl Default for LandcoverOptions {
    fn default() -> Self {
        LandcoverOptions {
            k: 6,
            scene: SceneOptions::default(),
            engine: EngineOptions::default(),
            limits: Limits::with_max_pixels(MAX_SCENE_PIXELS),
        }
    }
}

impl LandcoverOptions {
    fn params(&self) -> KMeansParams {
        self.engine.params(self.k)
    }

    /// Checks the class count against the 8-bit class raster.
    fn check_k(&self) -> Result<()> {
        if self.k > MAX_CLASSES {
            return Err(ParamsError::Other(format!(
                "k = {} classes: the 8-bit class raster holds at most {MAX_CLASSES} (0 is nodata)",
                self.k
            ))
            .into());
        }
        Ok(())
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
    /// Tool version, input, seed and every engine setting.
    #[serde(flatten)]
    pub header: DocumentHeader,
    pub caution: String,
    pub k: usize,
    pub mode: Mode,
    pub beta: Option<f64>,
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

/// Default pixel limit of a scene: rasters are read strip by strip, so it is higher than
/// the limit for images, which are decoded whole.
pub const MAX_SCENE_PIXELS: u64 = 1_000_000_000;

/// Most classes: `classes.tif` is 8-bit, with 0 for nodata.
pub const MAX_CLASSES: usize = 255;

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

/// Runs the whole workflow on a file and writes all outputs atomically.
pub fn landcover_file(
    input: &Path,
    out_dir: &Path,
    opts: &LandcoverOptions,
) -> Result<LandcoverReport> {
    let t0 = Instant::now();
    let mut phases = crate::trace::Phases::start("landcover");
    let params = opts.params().check()?;
    opts.check_k()?;
    let stem = crate::output::stem_of(input)?;
    let SceneSample {
        mut raster,
        info,
        feats,
        dim,
        sample,
        valid_pixels,
        total_pixels,
        scaler,
    } = scene_sample(input, &opts.scene, opts.engine.seed, &opts.limits, opts.k)?;
    let (w, h) = (info.width, info.height);
    let sample_n = sample.len() / dim;
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
                    scaler.apply(f);
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
        header: DocumentHeader::new(
            input.file_name().map(|n| n.to_string_lossy().into_owned()),
            opts.engine,
        ),
        caution: CAUTION.into(),
        k,
        mode: opts.engine.mode,
        beta,
        sse,
        bands: feats.bands.iter().map(|b| b + 1).collect(),
        indices: opts.scene.indices.iter().map(IndexSpec::name).collect(),
        scale: opts.scene.scale,
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
