//! `sweep`: fit every K of a range and score each fit, so K is chosen from evidence.
//!
//! Per K: the k-means objective (SSE), for colour images the mean and 95th-percentile
//! CIEDE2000 between source and reduced pixels, the mean normalised entropy of the soft
//! assignment at the automatic β, the mean silhouette on a seeded sample (Rousseeuw
//! 1987) and the BIC of the matching isotropic Gaussian mixture (Schwarz 1978). Fits
//! come from one warm-started path ([`crate::cluster::k_path`]), the same path
//! `reduce --target-delta-e` walks, so the two always agree.

use crate::cluster::{auto_beta, bic, k_path, silhouette, soft_assign, weighted_sample, Dataset};
use crate::colour::Space;
use crate::error::{Error, ParamsError, Result};
use crate::histogram::{self, IndexedHistogram};
use crate::landcover::{scene_sample, LandcoverOptions};
use crate::limits::Limits;
use crate::output::OutputSet;
use crate::raster::{self, Pixels};
use crate::reduce::{entry_delta_e2000, entry_features, mean_and_p95, stem_of};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Output names (exact: other tools read them).
pub const OUTPUT_NAMES: [&str; 3] = ["sweep.csv", "sweep.json", "sweep.svg"];

/// An inclusive range of K, written `A..B` (for example `2..16`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KRange {
    pub min: usize,
    pub max: usize,
}

impl std::str::FromStr for KRange {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let bad = || format!("K range must look like 2..16 (both ends included), got '{s}'");
        let (a, b) = s.trim().split_once("..").ok_or_else(bad)?;
        let b = b.strip_prefix('=').unwrap_or(b);
        let min: usize = a.trim().parse().map_err(|_| bad())?;
        let max: usize = b.trim().parse().map_err(|_| bad())?;
        if min == 0 {
            return Err(format!("K range must start at 1 or more, got '{s}'"));
        }
        if max < min {
            return Err(format!("K range end is below its start in '{s}'"));
        }
        if max > 256 {
            return Err(format!(
                "K range end {max} is above 256, the most a sweep fits"
            ));
        }
        Ok(KRange { min, max })
    }
}

/// Settings of a sweep.
#[derive(Debug, Clone)]
pub struct SweepOptions {
    pub range: KRange,
    /// Clustering space for colour images. Default: CIELAB.
    pub space: Space,
    pub seed: u64,
    pub max_iter: usize,
    pub tolerance: f64,
    pub shift_tolerance: f64,
    /// Pixels drawn (seeded, in proportion to their count) for the silhouette, which
    /// costs O(n²). Default: 2000.
    pub silhouette_sample: usize,
    pub limits: Limits,
    /// Multi-band scene settings (bands, indices, scaling, nodata, fitting sample): when
    /// set, the input is read as a raster scene as `landcover` reads it.
    pub scene: Option<LandcoverOptions>,
}

impl SweepOptions {
    /// Defaults for a range.
    pub fn new(range: KRange) -> Self {
        let p = crate::cluster::KMeansParams::new(1);
        SweepOptions {
            range,
            space: Space::Cielab,
            seed: p.seed,
            max_iter: p.max_iter,
            tolerance: p.tolerance,
            shift_tolerance: p.shift_tolerance,
            silhouette_sample: 2000,
            limits: Limits::default(),
            scene: None,
        }
    }
}

/// One K of a sweep. ΔE fields are null for multi-band scenes; silhouette is null at
/// K = 1 and BIC when the SSE is zero.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepRow {
    pub k: usize,
    pub sse: f64,
    pub mean_delta_e2000: Option<f64>,
    pub p95_delta_e2000: Option<f64>,
    pub mean_uncertainty: f64,
    pub silhouette: Option<f64>,
    pub bic: Option<f64>,
}

/// `sweep.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepDocument {
    pub tool_version: String,
    pub input: Option<String>,
    /// What was clustered: "cielab", "oklab", or the scene's feature names.
    pub features: String,
    pub seed: u64,
    pub silhouette_sample: usize,
    pub rows: Vec<SweepRow>,
    /// K suggested by each criterion: "silhouette" (largest mean silhouette) and "bic"
    /// (lowest BIC); ties go to the smaller K.
    pub suggested: BTreeMap<String, usize>,
}

/// Scores every K of the range on weighted rows. `labs` (CIELAB of each row) turns on
/// the ΔE2000 columns; `total` is the pixel count the weights sum to.
pub fn sweep_rows(
    data: &Dataset,
    labs: Option<&[[f64; 3]]>,
    space: Space,
    opts: &SweepOptions,
) -> Vec<SweepRow> {
    let total = data.total_weight();
    let dim = data.dim();
    let weights: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    let picks = weighted_sample(data, opts.silhouette_sample, opts.seed);
    let sample_rows: Vec<f32> = picks.iter().flat_map(|&i| data.row(i).to_vec()).collect();
    let stop = crate::cluster::Stop {
        max_iter: opts.max_iter,
        tolerance: opts.tolerance,
        shift_tolerance: opts.shift_tolerance,
    };
    let mut rows = Vec::new();
    // Contributor timings (CHROMASIFT_TIMINGS): fits, ΔE2000, soft entropy, silhouette.
    let mut spent = [0.0f64; 4];
    let mut clock = std::time::Instant::now();
    let mut lap = |slot: usize, spent: &mut [f64; 4]| {
        spent[slot] += clock.elapsed().as_secs_f64();
        clock = std::time::Instant::now();
    };
    k_path(
        data,
        opts.range.min,
        opts.range.max,
        opts.seed,
        stop,
        true,
        |k, res| {
            lap(0, &mut spent);
            let (mean_de, p95_de) = match labs {
                Some(labs) => {
                    let de = entry_delta_e2000(&res.means, &res.labels, labs, space);
                    let (m, p) = mean_and_p95(&de, &weights, total);
                    (Some(m), Some(p))
                }
                None => (None, None),
            };
            lap(1, &mut spent);
            let beta = auto_beta(res.sse, total, dim);
            let soft = soft_assign(data, &res.means, beta);
            let mut unc = 0.0;
            for (h, w) in soft.entropy.iter().zip(&weights) {
                unc += w * *h as f64;
            }
            lap(2, &mut spent);
            let sample_labels: Vec<u32> = picks.iter().map(|&i| res.labels[i]).collect();
            let mut cluster_w = vec![0.0f64; k];
            for (l, w) in res.labels.iter().zip(&weights) {
                cluster_w[*l as usize] += w;
            }
            rows.push(SweepRow {
                k,
                sse: res.sse,
                mean_delta_e2000: mean_de,
                p95_delta_e2000: p95_de,
                mean_uncertainty: unc / total,
                silhouette: silhouette(&sample_rows, dim, &sample_labels),
                bic: bic(res.sse, &cluster_w, dim),
            });
            lap(3, &mut spent);
            true
        },
    );
    if crate::trace::enabled() {
        eprintln!(
            "chromasift: timing: sweep over K: fits {:.3} s, ΔE2000 {:.3} s, soft entropy {:.3} s, silhouette {:.3} s",
            spent[0], spent[1], spent[2], spent[3]
        );
    }
    rows
}

/// The K each criterion suggests.
pub fn suggest(rows: &[SweepRow]) -> BTreeMap<String, usize> {
    let mut out = BTreeMap::new();
    let best = |key: &dyn Fn(&SweepRow) -> Option<f64>, higher: bool| {
        let mut b: Option<(f64, usize)> = None;
        for r in rows {
            if let Some(v) = key(r) {
                let better = match b {
                    None => true,
                    Some((bv, _)) => {
                        if higher {
                            v > bv
                        } else {
                            v < bv
                        }
                    }
                };
                if better {
                    b = Some((v, r.k));
                }
            }
        }
        b.map(|(_, k)| k)
    };
    if let Some(k) = best(&|r| r.silhouette, true) {
        out.insert("silhouette".to_string(), k);
    }
    if let Some(k) = best(&|r| r.bic, false) {
        out.insert("bic".to_string(), k);
    }
    out
}

/// What [`sweep_file`] did.
#[derive(Debug, Clone)]
pub struct SweepReport {
    pub outputs: Vec<PathBuf>,
    pub document: SweepDocument,
    pub notes: Vec<String>,
    pub seconds: f64,
}

/// True when the file should be read as a multi-band scene rather than a colour image:
/// asked for (`scene` options with bands or indices), or a TIFF that is georeferenced,
/// has more than four bands, or floating-point or signed samples.
fn is_scene(input: &Path, opts: &SweepOptions) -> Result<bool> {
    if let Some(s) = &opts.scene {
        if s.bands.is_some() || !s.indices.is_empty() {
            return Ok(true);
        }
    }
    let ext = input
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if !matches!(ext.as_deref(), Some("tif") | Some("tiff")) {
        return Ok(false);
    }
    let r = crate::geotiff::GeoRaster::open(input, &opts.limits)?;
    let info = r.info();
    Ok(!info.geo.is_empty()
        || info.bands > 4
        || !matches!(
            info.sample,
            crate::geotiff::SampleKind::U8 | crate::geotiff::SampleKind::U16
        ))
}

/// Runs a sweep on a file and writes `sweep.csv`, `sweep.json` and `sweep.svg` into
/// `out_dir` atomically.
pub fn sweep_file(input: &Path, out_dir: &Path, opts: &SweepOptions) -> Result<SweepReport> {
    let t0 = Instant::now();
    if opts.silhouette_sample < 2 {
        return Err(ParamsError::Other("--silhouette-sample must be at least 2".into()).into());
    }
    crate::cluster::KMeansParams::new(opts.range.max)
        .max_iter(opts.max_iter)
        .tolerance(opts.tolerance)
        .shift_tolerance(opts.shift_tolerance)
        .check()?;
    stem_of(input)?;
    let mut set = OutputSet::prepare(out_dir, &[input])?;
    for n in OUTPUT_NAMES {
        set.check_target(n)?;
    }
    let mut notes = Vec::new();
    let (rows, features) = if is_scene(input, opts)? {
        let scene_opts = opts.scene.clone().unwrap_or_default();
        let s = scene_sample(
            input,
            &LandcoverOptions {
                limits: opts.limits,
                seed: opts.seed,
                ..scene_opts
            },
            opts.range.min,
        )?;
        let data = Dataset::new(&s.sample, s.dim, None)?;
        let rows = sweep_rows(&data, None, opts.space, opts);
        (
            rows,
            format!("bands/indices {}", s.feature_names().join(",")),
        )
    } else {
        let img = raster::decode(input, &opts.limits)?;
        let IndexedHistogram { histogram: h, .. } = match &img.pixels {
            Pixels::Rgba8(p) => histogram::from_rgba8(p),
            Pixels::Rgba16(p) => histogram::from_rgba16(p),
        };
        drop(img);
        if h.is_empty() {
            return Err(Error::InputData {
                path: input.into(),
                message: "every pixel is fully transparent; there is nothing to sweep".into(),
            });
        }
        let weights = h.weights();
        let (feat, labs) = entry_features(&h, opts.space);
        let data = Dataset::new(&feat, 3, Some(&weights))?;
        let rows = sweep_rows(&data, Some(&labs), opts.space, opts);
        (rows, opts.space.name().to_string())
    };
    let last = rows.last().map_or(0, |r| r.k);
    if last < opts.range.max {
        notes.push(format!(
            "the data has only {last} distinct values to cluster; the sweep stops at K = {last}"
        ));
    }
    if rows.is_empty() {
        return Err(Error::InputData {
            path: input.into(),
            message: format!(
                "fewer distinct colours or values than K = {}; nothing to sweep",
                opts.range.min
            ),
        });
    }
    let document = SweepDocument {
        tool_version: crate::TOOL_VERSION.into(),
        input: input.file_name().map(|n| n.to_string_lossy().into_owned()),
        features,
        seed: opts.seed,
        silhouette_sample: opts.silhouette_sample,
        suggested: suggest(&rows),
        rows,
    };
    set.write_bytes(OUTPUT_NAMES[0], sweep_csv(&document).as_bytes())?;
    let json = serde_json::to_string_pretty(&document).expect("sweep document serialises");
    set.write_bytes(OUTPUT_NAMES[1], format!("{json}\n").as_bytes())?;
    set.write_bytes(OUTPUT_NAMES[2], sweep_svg(&document, opts.space).as_bytes())?;
    let outputs = set.commit()?;
    Ok(SweepReport {
        outputs,
        document,
        notes,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

fn opt(v: Option<f64>) -> String {
    v.map_or(String::new(), |v| format!("{v}"))
}

/// `sweep.csv`: one row per K with a header, then a `# suggested` comment line per criterion.
pub fn sweep_csv(doc: &SweepDocument) -> String {
    let mut s =
        String::from("k,sse,mean_delta_e2000,p95_delta_e2000,mean_uncertainty,silhouette,bic\n");
    for r in &doc.rows {
        s.push_str(&format!(
            "{},{},{},{},{},{},{}\n",
            r.k,
            r.sse,
            opt(r.mean_delta_e2000),
            opt(r.p95_delta_e2000),
            r.mean_uncertainty,
            opt(r.silhouette),
            opt(r.bic)
        ));
    }
    for (name, k) in &doc.suggested {
        s.push_str(&format!("# suggested by {name}: K = {k}\n"));
    }
    s
}

/// About `n` round tick values covering [lo, hi].
fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi.is_nan() || lo.is_nan() || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut v = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while v <= hi + step * 1e-9 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    out
}

fn label(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{v:.1e}")
    } else if a >= 100.0 || v.fract() == 0.0 {
        format!("{v:.0}")
    } else {
        let s = format!("{v:.3}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// One line of a panel.
struct Series<'a> {
    name: &'a str,
    colour: &'a str,
    values: Vec<(usize, f64)>,
    dashed: bool,
}

/// One plot panel at (x0, y0).
#[allow(clippy::too_many_arguments)]
fn panel(
    out: &mut String,
    x0: f64,
    y0: f64,
    title: &str,
    y_unit: &str,
    ks: (usize, usize),
    series: &[Series],
    marks: &[(usize, &str)],
    guides: &[(f64, &str)],
) {
    let (w, h) = (400.0, 230.0);
    let (l, r, t, b) = (62.0, 12.0, 30.0, 40.0);
    let (pw, ph) = (w - l - r, h - t - b);
    out.push_str(&format!(
        "<g transform=\"translate({x0},{y0})\">\n<text x=\"{}\" y=\"18\" class=\"title\">{}</text>\n",
        l,
        escape(title)
    ));
    let vals: Vec<f64> = series
        .iter()
        .flat_map(|s| s.values.iter().map(|v| v.1))
        .chain(guides.iter().map(|g| g.0))
        .filter(|v| v.is_finite())
        .collect();
    if vals.is_empty() {
        out.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" class=\"note\">not defined for this input</text>\n</g>\n",
            l + 10.0,
            t + ph / 2.0
        ));
        return;
    }
    let (mut lo, mut hi) = vals
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if hi - lo < 1e-12 * hi.abs().max(1.0) {
        lo -= 0.5 * lo.abs().max(1.0);
        hi += 0.5 * hi.abs().max(1.0);
    }
    let pad = 0.05 * (hi - lo);
    let (lo, hi) = (lo - pad, hi + pad);
    let xs = |k: usize| {
        if ks.1 == ks.0 {
            l + pw / 2.0
        } else {
            l + pw * (k - ks.0) as f64 / (ks.1 - ks.0) as f64
        }
    };
    let ys = |v: f64| t + ph * (1.0 - (v - lo) / (hi - lo));
    // Axes and ticks.
    out.push_str(&format!(
        "<rect x=\"{l}\" y=\"{t}\" width=\"{pw}\" height=\"{ph}\" class=\"frame\"/>\n"
    ));
    for v in ticks(lo, hi, 4) {
        let y = ys(v);
        out.push_str(&format!(
            "<line x1=\"{l}\" x2=\"{}\" y1=\"{y:.1}\" y2=\"{y:.1}\" class=\"grid\"/>\n<text x=\"{}\" y=\"{:.1}\" class=\"ytick\">{}</text>\n",
            l + pw,
            l - 5.0,
            y + 4.0,
            label(v)
        ));
    }
    let step = ((ks.1 - ks.0) / 12).max(1);
    for k in (ks.0..=ks.1).step_by(step) {
        out.push_str(&format!(
            "<text x=\"{:.1}\" y=\"{}\" class=\"xtick\">{k}</text>\n",
            xs(k),
            t + ph + 15.0
        ));
    }
    out.push_str(&format!(
        "<text x=\"{:.1}\" y=\"{}\" class=\"axis\">K (colours or classes)</text>\n",
        l + pw / 2.0,
        t + ph + 32.0
    ));
    out.push_str(&format!(
        "<text transform=\"translate(14,{:.1}) rotate(-90)\" class=\"axis\">{}</text>\n",
        t + ph / 2.0,
        escape(y_unit)
    ));
    for (gi, (v, name)) in guides.iter().enumerate() {
        if *v >= lo && *v <= hi {
            let y = ys(*v);
            // Labels staggered along the line so that close guides stay readable.
            out.push_str(&format!(
                "<line x1=\"{l}\" x2=\"{}\" y1=\"{y:.1}\" y2=\"{y:.1}\" class=\"guide\"/>\n<text x=\"{:.1}\" y=\"{:.1}\" class=\"guidetext\">{}</text>\n",
                l + pw,
                l + pw * (0.55 + 0.45 * (1 - gi % 2) as f64) - 4.0,
                y - 3.0,
                escape(name)
            ));
        }
    }
    for (mi, (k, name)) in marks.iter().enumerate() {
        let x = xs(*k);
        // Label on the side of the line with room for it.
        let (tx, anchor) = if x > l + pw * 0.7 {
            (x - 3.0, "end")
        } else {
            (x + 3.0, "start")
        };
        out.push_str(&format!(
            "<line x1=\"{x:.1}\" x2=\"{x:.1}\" y1=\"{t}\" y2=\"{}\" class=\"mark\"/>\n<text x=\"{tx:.1}\" y=\"{}\" class=\"marktext\" text-anchor=\"{anchor}\">{}</text>\n",
            t + ph,
            t + ph - 6.0 - 12.0 * mi as f64,
            escape(name)
        ));
    }
    for (si, s) in series.iter().enumerate() {
        let pts: Vec<String> = s
            .values
            .iter()
            .filter(|v| v.1.is_finite())
            .map(|&(k, v)| format!("{:.1},{:.1}", xs(k), ys(v)))
            .collect();
        out.push_str(&format!(
            "<polyline points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"2\"{}/>\n",
            pts.join(" "),
            s.colour,
            if s.dashed {
                " stroke-dasharray=\"5,3\""
            } else {
                ""
            }
        ));
        for p in &pts {
            let (x, y) = p.split_once(',').unwrap();
            out.push_str(&format!(
                "<circle cx=\"{x}\" cy=\"{y}\" r=\"2.5\" fill=\"{}\"/>\n",
                s.colour
            ));
        }
        if series.len() > 1 {
            let ly = t + 14.0 + 14.0 * si as f64;
            out.push_str(&format!(
                "<line x1=\"{}\" x2=\"{}\" y1=\"{ly}\" y2=\"{ly}\" stroke=\"{}\" stroke-width=\"2\"/>\n<text x=\"{}\" y=\"{}\" class=\"legend\">{}</text>\n",
                l + pw - 120.0,
                l + pw - 100.0,
                s.colour,
                l + pw - 96.0,
                ly + 4.0,
                escape(s.name)
            ));
        }
    }
    out.push_str("</g>\n");
}

/// `sweep.svg`: one panel per measure against K, the suggested K marked.
pub fn sweep_svg(doc: &SweepDocument, space: Space) -> String {
    let ks = (
        doc.rows.first().map_or(1, |r| r.k),
        doc.rows.last().map_or(1, |r| r.k),
    );
    let col = |f: &dyn Fn(&SweepRow) -> Option<f64>| -> Vec<(usize, f64)> {
        doc.rows
            .iter()
            .filter_map(|r| f(r).map(|v| (r.k, v)))
            .collect()
    };
    let colour_image = doc.rows.iter().any(|r| r.mean_delta_e2000.is_some());
    let sse_unit = if colour_image {
        match space {
            Space::Cielab => "SSE (ΔE*ab²)",
            Space::Oklab => "SSE (OKLab units²)",
        }
    } else {
        "SSE (scaled units²)"
    };
    let sil = doc.suggested.get("silhouette").copied();
    let bic_k = doc.suggested.get("bic").copied();
    let mut s = String::new();
    s.push_str(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"820\" height=\"760\" viewBox=\"0 0 820 760\" font-family=\"sans-serif\">\n<style>\n\
.title{font-size:14px;font-weight:bold}.axis{font-size:11px;text-anchor:middle}\
.xtick{font-size:10px;text-anchor:middle}.ytick{font-size:10px;text-anchor:end}\
.frame{fill:none;stroke:#333}.grid{stroke:#ddd}.mark{stroke:#c0392b;stroke-width:1.5;stroke-dasharray:4,3}\
.marktext{font-size:10px;fill:#c0392b}.guide{stroke:#888;stroke-dasharray:2,3}\
.guidetext{font-size:9px;fill:#666;text-anchor:end}.legend{font-size:10px}.note{font-size:12px;fill:#666}\n</style>\n\
<rect width=\"820\" height=\"760\" fill=\"white\"/>\n",
    );
    s.push_str(&format!(
        "<text x=\"10\" y=\"22\" font-size=\"16\" font-weight=\"bold\">chromasift sweep: {}  (K {}..{}, {})</text>\n",
        escape(doc.input.as_deref().unwrap_or("input")),
        ks.0,
        ks.1,
        escape(&doc.features)
    ));
    let mut marks_all: Vec<(usize, String)> = Vec::new();
    if let Some(k) = sil {
        marks_all.push((k, format!("silhouette: {k}")));
    }
    if let Some(k) = bic_k {
        marks_all.push((k, format!("BIC: {k}")));
    }
    let marks: Vec<(usize, &str)> = marks_all.iter().map(|(k, n)| (*k, n.as_str())).collect();
    panel(
        &mut s,
        0.0,
        30.0,
        "Colour difference, source vs reduced",
        "ΔE2000",
        ks,
        &[
            Series {
                name: "mean",
                colour: "#1f77b4",
                values: col(&|r| r.mean_delta_e2000),
                dashed: false,
            },
            Series {
                name: "95th percentile",
                colour: "#ff7f0e",
                values: col(&|r| r.p95_delta_e2000),
                dashed: true,
            },
        ],
        &marks,
        &[(1.0, "1: noticeable*"), (3.0, "2–3: print tolerance*")],
    );
    panel(
        &mut s,
        410.0,
        30.0,
        "k-means objective, summed over pixels",
        sse_unit,
        ks,
        &[Series {
            name: "SSE",
            colour: "#2ca02c",
            values: col(&|r| Some(r.sse)),
            dashed: false,
        }],
        &marks,
        &[],
    );
    panel(
        &mut s,
        0.0,
        270.0,
        "Mean silhouette (higher is better)",
        "silhouette (−1..1)",
        ks,
        &[Series {
            name: "silhouette",
            colour: "#9467bd",
            values: col(&|r| r.silhouette),
            dashed: false,
        }],
        &sil.map(|k| vec![(k, "suggested")]).unwrap_or_default(),
        &[],
    );
    panel(
        &mut s,
        410.0,
        270.0,
        "BIC (lower is better)",
        "BIC",
        ks,
        &[Series {
            name: "BIC",
            colour: "#8c564b",
            values: col(&|r| r.bic),
            dashed: false,
        }],
        &bic_k.map(|k| vec![(k, "suggested")]).unwrap_or_default(),
        &[],
    );
    panel(
        &mut s,
        0.0,
        510.0,
        "Mean uncertainty of the soft assignment",
        "entropy / ln K (0 = certain)",
        ks,
        &[Series {
            name: "uncertainty",
            colour: "#17becf",
            values: col(&|r| Some(r.mean_uncertainty)),
            dashed: false,
        }],
        &marks,
        &[],
    );
    // Notes panel.
    let mut y = 540.0;
    let mut note = |text: &str, s: &mut String| {
        s.push_str(&format!(
            "<text x=\"420\" y=\"{y}\" font-size=\"12\">{}</text>\n",
            escape(text)
        ));
        y += 18.0;
    };
    note("Suggested K", &mut s);
    for (name, k) in &doc.suggested {
        note(&format!("  {name}: K = {k}"), &mut s);
    }
    note("Silhouette: Rousseeuw (1987), on a seeded sample", &mut s);
    note(
        &format!("  of {} pixels or rows.", doc.silhouette_sample),
        &mut s,
    );
    note("BIC: Schwarz (1978), isotropic Gaussian mixture;", &mut s);
    note(
        "  on millions of pixels it tends to favour large K.",
        &mut s,
    );
    note("* Dotted grey lines: ΔE2000 rules of thumb,", &mut s);
    note("  common practice, not a standard.", &mut s);
    s.push_str("</svg>\n");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn k_ranges_parse_and_refuse() {
        assert_eq!(
            "2..16".parse::<KRange>().unwrap(),
            KRange { min: 2, max: 16 }
        );
        assert_eq!(
            "3..=5".parse::<KRange>().unwrap(),
            KRange { min: 3, max: 5 }
        );
        assert_eq!("4..4".parse::<KRange>().unwrap(), KRange { min: 4, max: 4 });
        for bad in ["", "2", "0..4", "5..3", "a..b", "2..1000", "2...5"] {
            assert!(bad.parse::<KRange>().is_err(), "{bad}");
        }
    }

    #[test]
    fn ticks_are_round_and_cover_the_range() {
        let t = ticks(0.13, 0.87, 4);
        let want = [0.2, 0.4, 0.6, 0.8];
        assert_eq!(t.len(), want.len());
        for (a, b) in t.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{t:?}");
        }
        assert!(ticks(5.0, 5.0, 4).len() == 1);
    }

    #[test]
    fn suggestions_take_the_best_and_the_smaller_k_on_ties() {
        let row = |k, s, b| SweepRow {
            k,
            sse: 1.0,
            mean_delta_e2000: None,
            p95_delta_e2000: None,
            mean_uncertainty: 0.0,
            silhouette: s,
            bic: b,
        };
        let rows = vec![
            row(1, None, Some(10.0)),
            row(2, Some(0.5), Some(4.0)),
            row(3, Some(0.7), Some(4.0)),
            row(4, Some(0.7), Some(6.0)),
        ];
        let s = suggest(&rows);
        assert_eq!(s["silhouette"], 3);
        assert_eq!(s["bic"], 2);
    }
}
