//! From a class raster to a labelled map: a label file applied (classes named, several
//! merged into one label, colours chosen), then a minimum mapping unit (patches below it
//! merged into the neighbour they share the longest border with, by
//! `features::merge::merge_small_regions`, 8-connected, nodata fixed). The whole class
//! raster is held in memory (2 bytes a pixel while merging).

use super::labels::{labelled_preview, Label, LabelSet};
use super::CAUTION;
use crate::error::{Error, ParamsError, Result};
use crate::features::components::FIXED;
use crate::features::merge::merge_small_regions;
use crate::limits::Limits;
use crate::raster::geotiff::{self, GeoRaster, GeoTags, PixelAreas};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// A minimum mapping unit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MinUnit {
    /// An area in square metres (needs a projected CRS in metres).
    SquareMetres(f64),
    /// A number of pixels.
    Pixels(usize),
}

impl std::str::FromStr for MinUnit {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let t = s.trim().to_ascii_lowercase();
        let num = |v: &str| {
            v.trim()
                .parse::<f64>()
                .ok()
                .filter(|x| x.is_finite() && *x > 0.0)
                .ok_or_else(|| format!("'{s}' is not a positive size (e.g. 0.5ha, 5000m2, 12px)"))
        };
        if let Some(v) = t.strip_suffix("ha") {
            Ok(MinUnit::SquareMetres(num(v)? * 10_000.0))
        } else if let Some(v) = t.strip_suffix("m2").or_else(|| t.strip_suffix("m²")) {
            Ok(MinUnit::SquareMetres(num(v)?))
        } else if let Some(v) = t.strip_suffix("px") {
            let n = num(v)?;
            if n.fract() != 0.0 {
                return Err(format!("'{s}': a pixel count is a whole number"));
            }
            Ok(MinUnit::Pixels(n as usize))
        } else {
            Err(format!("'{s}' needs a unit: ha, m2 or px (e.g. 0.5ha)"))
        }
    }
}

/// What labelling and the minimum mapping unit did to one label.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LabelReport {
    #[serde(flatten)]
    pub label: Label,
    /// Pixels after labelling, before the minimum mapping unit.
    pub pixels_labelled: u64,
    /// Pixels in the final map.
    pub pixels: u64,
    pub area_m2: Option<f64>,
    pub hectares: Option<f64>,
}

/// The labels document (`STEM.labels.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LabelsDocument {
    pub tool_version: String,
    pub caution: String,
    /// The class raster's file name, and the label file's (`null`: classes kept as they are).
    pub classes: String,
    pub label_file: Option<String>,
    pub min_unit: Option<MinUnit>,
    /// The minimum mapping unit in pixels (patches smaller than this were merged).
    pub min_unit_pixels: Option<usize>,
    /// Ground area of a pixel, m² (the mean over the grid where it varies, as on Web
    /// Mercator or geographic grids): what the unit in m² or ha was divided by.
    pub pixel_area_m2: Option<f64>,
    /// How the ground areas were measured (`landcover`'s `area_method` names); each
    /// label's area is the sum of its pixels' areas.
    #[serde(default)]
    pub area_method: String,
    /// Patches merged into a neighbour, pixels that changed label, and patches below the
    /// unit kept because they touch only nodata and the edge.
    pub patches_merged: usize,
    pub pixels_changed: u64,
    pub patches_kept_isolated: usize,
    pub labels: Vec<LabelReport>,
    /// Labels that name classes the map does not hold, and labels the minimum mapping
    /// unit emptied.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

/// Settings of [`label_file`].
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LabelOptions {
    pub labels: Option<PathBuf>,
    pub min_unit: Option<MinUnit>,
    /// Polygons to write: GeoJSON (WGS 84) and/or GeoPackage (the raster's CRS).
    pub geojson: bool,
    pub geopackage: bool,
    /// The uncertainty raster for the polygons' mean uncertainty (default: the class
    /// raster's sibling `STEM.uncertainty.tif`, when there is one).
    pub uncertainty: Option<PathBuf>,
    pub limits: Limits,
}

/// Output names: `STEM.labelled.tif`, `.labelled.png`, `.labels.json`, `.labels.csv`, and
/// with polygons `.patches.geojson` and `.patches.gpkg`, STEM
/// the class raster's stem without a final `.classes`.
pub fn label_names(classes: &Path) -> Result<[String; 6]> {
    let stem = crate::output::stem_of(classes)?;
    let stem = stem.strip_suffix(".classes").unwrap_or(&stem).to_string();
    Ok([
        format!("{stem}.labelled.tif"),
        format!("{stem}.labelled.png"),
        format!("{stem}.labels.json"),
        format!("{stem}.labels.csv"),
        format!("{stem}.patches.geojson"),
        format!("{stem}.patches.gpkg"),
    ])
}

/// A class raster read whole.
pub(super) struct ClassRaster {
    pub(super) width: usize,
    pub(super) height: usize,
    pub(super) geo: GeoTags,
    pub(super) values: Vec<u8>,
}

/// Reads a one-band class raster (values 0..=255, 0 nodata).
pub(super) fn read_class_raster(path: &Path, limits: &Limits) -> Result<ClassRaster> {
    let mut r = GeoRaster::open(path, limits)?;
    let info = r.info().clone();
    if info.bands != 1 {
        return Err(Error::InputData {
            path: path.into(),
            message: format!("has {} bands; a class raster has one", info.bands),
        });
    }
    let mut values = Vec::with_capacity(info.width as usize * info.height as usize);
    for b in 0..r.block_count() {
        for v in r.read_block(b)?.data {
            if !(v.fract() == 0.0 && (0.0..=255.0).contains(&v)) {
                return Err(Error::InputData {
                    path: path.into(),
                    message: format!("holds {v}, not a class number 0 to 255"),
                });
            }
            values.push(v as u8);
        }
    }
    Ok(ClassRaster {
        width: info.width as usize,
        height: info.height as usize,
        geo: info.geo,
        values,
    })
}

/// The label names of a labelled map (`STEM.labelled.tif`) from the labels document
/// written beside it (`STEM.labels.json`): its file name and number → name. None for
/// another raster, or when there is no such document.
pub(super) fn label_names_beside(
    classes: &Path,
    limits: &Limits,
) -> Result<Option<(String, std::collections::HashMap<usize, String>)>> {
    let Some(stem) = classes
        .file_name()
        .and_then(|n| n.to_str())
        .and_then(|n| n.strip_suffix(".labelled.tif"))
    else {
        return Ok(None);
    };
    let path = classes.with_file_name(format!("{stem}.labels.json"));
    if !path.is_file() {
        return Ok(None);
    }
    let bytes = super::sample::read_bounded(&path, limits)?;
    let doc: LabelsDocument = serde_json::from_slice(&bytes).map_err(|e| Error::InputData {
        path: path.clone(),
        message: format!("is not a labels document: {e}"),
    })?;
    let names = doc
        .labels
        .iter()
        .map(|l| (l.label.number as usize, l.label.name.clone()))
        .collect();
    Ok(Some((super::sample::source_name(&path), names)))
}

/// The mean ground area of the grid's pixels, m² (none when they have none).
fn mean_area(areas: &PixelAreas, width: usize, height: usize) -> Option<f64> {
    if let Some(a) = areas.uniform() {
        return Some(a);
    }
    if !areas.is_known() || width == 0 || height == 0 {
        return None;
    }
    let mut row = vec![0.0f64; width];
    let mut sum = 0.0;
    for y in 0..height {
        areas.row_into(y as u32, &mut row);
        sum += row.iter().sum::<f64>();
    }
    Some(sum / (width * height) as f64)
}

/// The ground area of each label value's pixels, m² (none when the pixels have none).
fn label_areas(areas: &PixelAreas, labels: &[u8], width: usize) -> Option<Vec<f64>> {
    if !areas.is_known() || width == 0 {
        return None;
    }
    let mut sum = vec![0.0f64; 256];
    let mut row = vec![0.0f64; width];
    for (y, ls) in labels.chunks(width).enumerate() {
        areas.row_into(y as u32, &mut row);
        for (&l, &a) in ls.iter().zip(&row) {
            sum[l as usize] += a;
        }
    }
    Some(sum)
}

/// Labels and minimum mapping unit applied in memory: the final labels per pixel and the
/// document.
pub(super) fn apply(
    classes: &Path,
    raster: &ClassRaster,
    set: &LabelSet,
    opts: &LabelOptions,
) -> Result<(Vec<u8>, LabelsDocument)> {
    let mut out = Vec::with_capacity(raster.values.len());
    for &c in &raster.values {
        let l = if c == 0 { 0 } else { set.of_class[c as usize] };
        if c != 0 && l == 0 {
            let file = opts
                .labels
                .as_deref()
                .map(super::sample::source_name)
                .unwrap_or_default();
            return Err(Error::InputData {
                path: classes.into(),
                message: format!("holds class {c}, which {file} gives no label"),
            });
        }
        out.push(l);
    }
    let count = |v: &[u8]| {
        let mut n = vec![0u64; 256];
        v.iter().for_each(|&l| n[l as usize] += 1);
        n
    };
    let before = count(&out);
    let areas = PixelAreas::new(&raster.geo, raster.width as u32, raster.height as u32);
    let pixel_area = mean_area(&areas, raster.width, raster.height);
    let min_pixels = match opts.min_unit {
        None => None,
        Some(MinUnit::Pixels(n)) => Some(n),
        Some(MinUnit::SquareMetres(a)) => match pixel_area {
            Some(p) => Some((a / p).ceil() as usize),
            None => {
                return Err(Error::InputData {
                    path: classes.into(),
                    message: format!(
                        "a minimum mapping unit in m² or ha needs pixels with a ground area; \
                         this raster has none ({}; give it in pixels, e.g. 12px)",
                        areas.note
                    ),
                })
            }
        },
    };
    let mapped: u64 = before[1..].iter().sum();
    if let Some(min) = min_pixels.filter(|&m| m as u64 > mapped) {
        return Err(ParamsError::Other(format!(
            "`min_unit` is {min} pixels, more than the map's {mapped} mapped pixels: every \
             patch would merge into one label"
        ))
        .into());
    }
    let (mut merged, mut isolated, mut changed) = (0, 0, 0u64);
    if let Some(min) = min_pixels {
        let mut wide: Vec<u16> = out
            .iter()
            .map(|&l| if l == 0 { FIXED } else { l as u16 })
            .collect();
        let stats = merge_small_regions(&mut wide, raster.width, raster.height, min);
        merged = stats.merged;
        isolated = stats.kept_isolated;
        for (o, &w) in out.iter_mut().zip(&wide) {
            let l = if w == FIXED { 0 } else { w as u8 };
            changed += (l != *o) as u64;
            *o = l;
        }
    }
    let after = count(&out);
    let mut warnings = Vec::new();
    for l in &set.labels {
        let (b, a) = (before[l.number as usize], after[l.number as usize]);
        if b == 0 {
            warnings.push(format!(
                "label '{}' names class{} {} that the map does not hold",
                l.name,
                if l.classes.len() == 1 { "" } else { "es" },
                l.classes
                    .iter()
                    .map(u8::to_string)
                    .collect::<Vec<_>>()
                    .join(", ")
            ));
        } else if a == 0 {
            warnings.push(format!(
                "label '{}' lost all its {b} pixels to the minimum mapping unit: every patch \
                 of it was smaller",
                l.name
            ));
        }
    }
    let ground = label_areas(&areas, &out, raster.width);
    let labels = set
        .labels
        .iter()
        .map(|l| {
            let px = after[l.number as usize];
            let area = ground.as_ref().map(|g| g[l.number as usize]);
            LabelReport {
                label: l.clone(),
                pixels_labelled: before[l.number as usize],
                pixels: px,
                area_m2: area,
                hectares: area.map(|a| a / 10_000.0),
            }
        })
        .collect();
    let doc = LabelsDocument {
        tool_version: crate::TOOL_VERSION.into(),
        caution: CAUTION.into(),
        classes: super::sample::source_name(classes),
        label_file: opts.labels.as_deref().map(super::sample::source_name),
        min_unit: opts.min_unit,
        min_unit_pixels: min_pixels,
        pixel_area_m2: pixel_area,
        area_method: areas.method.name().into(),
        patches_merged: merged,
        pixels_changed: changed,
        patches_kept_isolated: isolated,
        labels,
        warnings,
    };
    Ok((out, doc))
}

impl LabelsDocument {
    /// The labels as CSV, one row per label.
    pub fn to_csv(&self) -> String {
        let mut s =
            String::from("label,name,colour,classes,pixels_labelled,pixels,area_m2,hectares\n");
        let opt = |v: Option<f64>| v.map(|x| format!("{x:.4}")).unwrap_or_default();
        for l in &self.labels {
            let name = if l.label.name.contains([',', '"']) {
                format!("\"{}\"", l.label.name.replace('"', "\"\""))
            } else {
                l.label.name.clone()
            };
            let classes: Vec<String> = l.label.classes.iter().map(u8::to_string).collect();
            s.push_str(&format!(
                "{},{},{},{},{},{},{},{}\n",
                l.label.number,
                name,
                l.label.colour,
                classes.join(" "),
                l.pixels_labelled,
                l.pixels,
                opt(l.area_m2),
                opt(l.hectares)
            ));
        }
        s
    }
}

/// Applies labels and the minimum mapping unit to a class raster and writes the labelled
/// raster (georeferencing copied, 0 = nodata), its preview with the label legend, and the
/// labels document and CSV into `out_dir`, atomically.
pub fn label_file(classes: &Path, out_dir: &Path, opts: &LabelOptions) -> Result<LabelsDocument> {
    if opts.labels.is_none() && opts.min_unit.is_none() && !opts.geojson && !opts.geopackage {
        return Err(ParamsError::Other(
            "give a label file (`labels`), a minimum mapping unit (`min_unit`) or polygons".into(),
        )
        .into());
    }
    let all = label_names(classes)?;
    let mut names: Vec<String> = all[..4].to_vec();
    if opts.geojson {
        names.push(all[4].clone());
    }
    if opts.geopackage {
        names.push(all[5].clone());
    }
    let uncertainty = opts.uncertainty.clone().or_else(|| {
        let sibling = classes.with_file_name(all[0].replace(".labelled.tif", ".uncertainty.tif"));
        sibling.is_file().then_some(sibling)
    });
    let mut spare: Vec<&Path> = opts.labels.iter().map(PathBuf::as_path).collect();
    spare.extend(uncertainty.as_deref());
    let load = || -> Result<(ClassRaster, Vec<u8>, LabelsDocument, LabelSet)> {
        let raster = read_class_raster(classes, &opts.limits)?;
        let set = match &opts.labels {
            Some(p) => super::labels::read_labels(p, &opts.limits)?,
            None => {
                let k = raster.values.iter().copied().max().unwrap_or(0) as usize;
                LabelSet::identity(k.max(1))
            }
        };
        let (labelled, doc) = apply(classes, &raster, &set, opts)?;
        Ok((raster, labelled, doc, set))
    };
    let write = |(raster, labelled, doc, set): (ClassRaster, Vec<u8>, LabelsDocument, LabelSet),
                 out: &mut crate::output::OutputSet| {
        let (w, h) = (raster.width as u32, raster.height as u32);
        let mut next = 0usize;
        out.write(&names[0], |wr| {
            let mut cursor = std::io::Cursor::new(Vec::new());
            // The labels' colours as the raster's colour table (0, nodata, black).
            let mut colours = vec![[0u8; 3]];
            colours.extend(set.colours());
            let wopts = geotiff::WriteOptions {
                big: geotiff::cog_size_bound(w, h, 1) > geotiff::BIGTIFF_ABOVE,
                deflate: true,
                colour_map: Some(colours),
            };
            let band = geotiff::CogBand {
                width: w,
                height: h,
                geo: &raster.geo,
                nodata: Some("0"),
                opts: &wopts,
                description: Some("label (0 = nodata; names in the labels document beside it)"),
            };
            // The labels are in memory already, and so are the tiles until the file is
            // assembled (compressed, they take less than the labels).
            geotiff::write_u8_cog(
                &mut cursor,
                &band,
                &mut geotiff::memory_scratch,
                &mut |_y0, rows| {
                    let n = rows as usize * raster.width;
                    let part = labelled[next..next + n].to_vec();
                    next += n;
                    Ok(part)
                },
            )
            .map_err(|e| std::io::Error::other(e.to_string()))?;
            std::io::Write::write_all(wr, &cursor.into_inner())
        })?;
        let (pw, ph, small) = shrink(&labelled, raster.width, raster.height);
        let (lw, lh, rgb) = labelled_preview(&small, pw, ph, &set);
        out.write(&names[1], |wr| {
            crate::raster::write_rgb_png(wr, lw as u32, lh as u32, &rgb)
        })?;
        out.write_bytes(
            &names[2],
            format!(
                "{}\n",
                serde_json::to_string_pretty(&doc).expect("serialises")
            )
            .as_bytes(),
        )?;
        out.write_bytes(&names[3], doc.to_csv().as_bytes())?;
        if opts.geojson || opts.geopackage {
            let unc = match &uncertainty {
                Some(p) => Some(read_uncertainty(p, &raster, &opts.limits)?),
                None => None,
            };
            let (patches, attrs) = super::patch_out::patches_with_attributes(
                (raster.width, raster.height, &raster.geo),
                &labelled,
                &set,
                unc.as_deref(),
            );
            let grid = crate::raster::geotiff::GridCrs::from_tags(&raster.geo);
            let mut k = 4;
            if opts.geojson {
                let text = super::vector_out::geojson(classes, &grid, &patches, &attrs)?;
                out.write_bytes(&names[k], text.as_bytes())?;
                k += 1;
            }
            if opts.geopackage {
                let tmp = tempfile::tempdir().map_err(|e| Error::io(out.dir(), e))?;
                let db = tmp.path().join("patches.gpkg");
                super::vector_out::write_geopackage(&db, classes, &grid, &patches, &attrs)?;
                let bytes = std::fs::read(&db).map_err(|e| Error::io(&db, e))?;
                out.write_bytes(&names[k], &bytes)?;
            }
        }
        Ok(doc)
    };
    let (doc, _) = crate::output::one_input(classes, out_dir, &spare, &names, load, write)?;
    Ok(doc)
}

/// The uncertainty raster, whole, refused when it is not on the class raster's grid.
fn read_uncertainty(path: &Path, classes: &ClassRaster, limits: &Limits) -> Result<Vec<f32>> {
    let mut r = GeoRaster::open(path, limits)?;
    let info = r.info().clone();
    if (info.width as usize, info.height as usize, info.bands) != (classes.width, classes.height, 1)
    {
        return Err(Error::InputData {
            path: path.into(),
            message: "is not a one-band raster on the class raster's grid".into(),
        });
    }
    let mut v = Vec::with_capacity(classes.width * classes.height);
    for b in 0..r.block_count() {
        v.extend(r.read_block(b)?.data);
    }
    Ok(v)
}

/// Every `step`-th pixel, so the longest side is at most 2048.
fn shrink(v: &[u8], w: usize, h: usize) -> (usize, usize, Vec<u8>) {
    let step = w.max(h).div_ceil(2048).max(1);
    let (sw, sh) = (w.div_ceil(step), h.div_ceil(step));
    let mut out = Vec::with_capacity(sw * sh);
    for y in (0..h).step_by(step) {
        for x in (0..w).step_by(step) {
            out.push(v[y * w + x]);
        }
    }
    (sw, sh, out)
}
