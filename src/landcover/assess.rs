//! Assessment of a class raster against reference data: a reference raster on the same
//! grid, or reference points (CSV of `x,y,label` in the raster's CRS). Clusters are matched
//! to reference labels (Hungarian method on the contingency table, by majority, or taken
//! as they are), then [`super::accuracy`] gives the confusion matrix, accuracies, kappa
//! and the error-adjusted areas.

use super::accuracy::{
    adjusted_rand_index, hungarian_max, AreaEstimates, Confusion, LabelAccuracy,
};
use super::CAUTION;
use crate::error::{Error, ParamsError, Result};
use crate::limits::Limits;
use crate::raster::geotiff::{GeoRaster, GeoTagValue, GeoTags, PixelAreas};
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// Where the reference labels come from.
#[derive(Debug, Clone, PartialEq)]
pub enum Reference {
    /// A raster on the class raster's grid; 0 and its nodata value mean "no reference".
    Raster(PathBuf),
    /// A CSV with columns `x`, `y` (in the raster's CRS) and `label`.
    Points(PathBuf),
}

/// How clusters become reference labels.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Matching {
    /// One label per cluster maximising the agreement (Hungarian method); clusters left
    /// over (more clusters than labels) take their majority label.
    Hungarian,
    /// Each cluster takes the reference label most of its units have.
    Majority,
    /// Class numbers are the labels already (a labelled map).
    Same,
}

impl std::str::FromStr for Matching {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.trim().to_ascii_lowercase().as_str() {
            "hungarian" => Ok(Matching::Hungarian),
            "majority" => Ok(Matching::Majority),
            "same" => Ok(Matching::Same),
            other => Err(format!(
                "unknown matching '{other}' (use hungarian, majority or same)"
            )),
        }
    }
}

/// The label one cluster was given.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClusterLabel {
    pub class: usize,
    /// Reference units (pixels or points) in this cluster.
    pub units: u64,
    pub label: String,
}

/// The assessment document (`STEM.assessment.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AssessmentDocument {
    pub tool_version: String,
    pub caution: String,
    /// The class raster's file name.
    pub classes: String,
    /// The reference's file name and kind (`raster` or `points`).
    pub reference: String,
    pub reference_kind: String,
    pub matching: Matching,
    /// Reference units used (pixels, or points on valid classes).
    pub units: u64,
    /// Points outside the raster, and points on nodata (class 0); 0 for a raster.
    pub points_outside: u64,
    pub points_on_nodata: u64,
    /// Adjusted Rand index of clusters against reference labels (before matching).
    pub adjusted_rand_index: Option<f64>,
    pub cluster_labels: Vec<ClusterLabel>,
    pub confusion: Confusion,
    pub overall_accuracy: Option<f64>,
    pub kappa: Option<f64>,
    pub per_label: Vec<LabelAccuracy>,
    /// Unit of the areas: `m2` when the class raster's pixels have a ground area (as
    /// `landcover` measures it), else `pixels`.
    pub area_unit: String,
    /// How the ground areas were measured (`landcover`'s `area_method` names).
    #[serde(default)]
    pub area_method: String,
    /// Error-adjusted areas (Olofsson et al. 2014), map labels as strata.
    pub areas: Option<AreaEstimates>,
    /// With `same` matching on a labelled map (`STEM.labelled.tif`): the labels document
    /// beside it (`STEM.labels.json`) whose names the map's numbers were compared by.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub map_label_names: Option<String>,
    /// What the figures may not show (with `same` matching: no map label equals any
    /// reference label).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub warnings: Vec<String>,
}

/// Counts gathered from the class raster and the reference.
struct Tally {
    /// Clusters (0..=255) × reference label index.
    table: Vec<Vec<u64>>,
    labels: Vec<String>,
    index: HashMap<String, usize>,
    /// Pixels of each class in the whole class raster, and their ground area (m², when
    /// the grid has one).
    class_pixels: Vec<u64>,
    class_area: Vec<f64>,
    outside: u64,
    on_nodata: u64,
}

impl Tally {
    fn new() -> Tally {
        Tally {
            table: vec![Vec::new(); 256],
            labels: Vec::new(),
            index: HashMap::new(),
            class_pixels: vec![0; 256],
            class_area: vec![0.0; 256],
            outside: 0,
            on_nodata: 0,
        }
    }

    /// Counts a mapped pixel of `class` at (col, row).
    fn map_pixel(&mut self, class: u8, areas: &PixelAreas, col: u32, row: u32) {
        self.class_pixels[class as usize] += 1;
        self.class_area[class as usize] += areas.at(col, row).unwrap_or(0.0);
    }

    fn add(&mut self, class: u8, label: &str) {
        let j = match self.index.get(label) {
            Some(&j) => j,
            None => {
                let j = self.labels.len();
                self.labels.push(label.to_string());
                self.index.insert(label.to_string(), j);
                self.table.iter_mut().for_each(|r| r.push(0));
                j
            }
        };
        self.table[class as usize][j] += 1;
    }
}

/// A class value as read (f32) → class number; refuses what is not 0..=255 whole.
fn class_of(path: &Path, v: f32) -> Result<u8> {
    if v.fract() == 0.0 && (0.0..=255.0).contains(&v) {
        Ok(v as u8)
    } else {
        Err(Error::InputData {
            path: path.into(),
            message: format!("holds {v}, not a class number 0 to 255"),
        })
    }
}

/// The affine pixel → map transform (x = a0 + a1·col + a2·row, y = a3 + a4·col + a5·row) of
/// pixel corners, from ModelPixelScale + ModelTiepoint or ModelTransformation.
fn affine(geo: &GeoTags) -> Option<[f64; 6]> {
    let reals = |v: &GeoTagValue| match v {
        GeoTagValue::Double(d) => Some(d.clone()),
        GeoTagValue::Float(f) => Some(f.iter().map(|&x| x as f64).collect()),
        _ => None,
    };
    // GTRasterTypeGeoKey 1025: 2 = pixel is point (tie points at pixel centres).
    let shift = if geo.geo_key(1025) == Some(2) {
        0.5
    } else {
        0.0
    };
    let t = if let (Some(s), Some(tp)) = (&geo.pixel_scale, &geo.tiepoint) {
        let (s, tp) = (reals(s)?, reals(tp)?);
        let (sx, sy) = (*s.first()?, *s.get(1)?);
        let (i, j, x, y) = (*tp.first()?, *tp.get(1)?, *tp.get(3)?, *tp.get(4)?);
        [
            x - (i - shift) * sx,
            sx,
            0.0,
            y + (j - shift) * sy,
            0.0,
            -sy,
        ]
    } else {
        let m = reals(geo.transformation.as_ref()?)?;
        if m.len() != 16 {
            return None;
        }
        let (x0, y0) = (m[3] - shift * (m[0] + m[1]), m[7] - shift * (m[4] + m[5]));
        [x0, m[0], m[1], y0, m[4], m[5]]
    };
    t.iter().all(|v| v.is_finite()).then_some(t)
}

/// Column and row of the pixel holding map point (x, y), if inside `w × h`.
fn pixel_of(t: &[f64; 6], x: f64, y: f64, w: u32, h: u32) -> Option<(u32, u32)> {
    let det = t[1] * t[5] - t[2] * t[4];
    if det == 0.0 {
        return None;
    }
    let (dx, dy) = (x - t[0], y - t[3]);
    let col = (t[5] * dx - t[2] * dy) / det;
    let row = (-t[4] * dx + t[1] * dy) / det;
    let inside = col >= 0.0 && row >= 0.0 && col < w as f64 && row < h as f64;
    inside.then(|| (col.floor() as u32, row.floor() as u32))
}

/// A class raster has one band.
fn one_band(classes: &Path, bands: usize) -> Result<()> {
    if bands == 1 {
        return Ok(());
    }
    Err(Error::InputData {
        path: classes.into(),
        message: format!("has {bands} bands; a class raster has one"),
    })
}

/// Counts a reference raster against the class raster, block row by block row.
fn tally_raster(classes: &Path, reference: &Path, limits: &Limits, t: &mut Tally) -> Result<()> {
    let mut cr = GeoRaster::open(classes, limits)?;
    let mut rr = GeoRaster::open(reference, limits)?;
    let (ci, ri) = (cr.info().clone(), rr.info().clone());
    one_band(classes, ci.bands)?;
    if (ci.width, ci.height) != (ri.width, ri.height) {
        return Err(Error::InputData {
            path: reference.into(),
            message: format!(
                "is {} × {} pixels, the class raster {} × {}: not the same grid",
                ri.width, ri.height, ci.width, ci.height
            ),
        });
    }
    let same =
        |a: &Option<GeoTagValue>, b: &Option<GeoTagValue>| a.is_none() || b.is_none() || a == b;
    if !(same(&ci.geo.pixel_scale, &ri.geo.pixel_scale)
        && same(&ci.geo.tiepoint, &ri.geo.tiepoint)
        && same(&ci.geo.transformation, &ri.geo.transformation))
    {
        return Err(Error::InputData {
            path: reference.into(),
            message: "its georeferencing differs from the class raster's: not the same grid".into(),
        });
    }
    let areas = PixelAreas::new(&ci.geo, ci.width, ci.height);
    let mut c_rows = crate::features::scene::RowReader::new(&mut cr);
    let mut r_rows = crate::features::scene::RowReader::new(&mut rr);
    let step = 64u32;
    let mut y = 0;
    while y < ci.height {
        let rows = step.min(ci.height - y);
        let cv = c_rows.rows(y, rows)?;
        let rv = r_rows.rows(y, rows)?;
        for (p, &c) in cv.iter().enumerate() {
            let class = class_of(classes, c)?;
            if class == 0 {
                continue;
            }
            t.map_pixel(class, &areas, p as u32 % ci.width, y + p as u32 / ci.width);
            let r = rv[p * ri.bands];
            if r == 0.0 || ri.is_nodata(r) || !r.is_finite() {
                continue;
            }
            if r.fract() != 0.0 {
                return Err(Error::InputData {
                    path: reference.into(),
                    message: format!("holds {r}; reference labels must be whole numbers"),
                });
            }
            t.add(class, &format!("{}", r as i64));
        }
        y += rows;
    }
    Ok(())
}

/// Reads reference points: a header with `x`, `y` and `label` columns, then one point a line.
fn read_points(path: &Path, limits: &Limits) -> Result<Vec<(f64, f64, String)>> {
    let text = limits.read_text(path, "reference point table")?;
    let table = |line: usize, message: String| Error::Table {
        path: path.into(),
        line: Some(line),
        message,
    };
    let t = super::labels::SmallTable::parse(&text, false)
        .ok_or_else(|| table(1, "the table is empty".into()))?;
    let find = |n: &str| {
        t.col(n).ok_or_else(|| {
            table(
                1,
                format!("no \"{n}\" column (the header needs x, y and label)"),
            )
        })
    };
    let (ix, iy, il) = (find("x")?, find("y")?, find("label")?);
    let mut out = Vec::new();
    for (line, f) in &t.rows {
        let get = |k: usize| f.get(k).copied().unwrap_or("");
        let num = |k: usize, n: &str| {
            get(k)
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    table(
                        *line,
                        format!("column \"{n}\": '{}' is not a number", get(k)),
                    )
                })
        };
        let label = get(il);
        if label.is_empty() {
            return Err(table(*line, "the label is empty".into()));
        }
        out.push((num(ix, "x")?, num(iy, "y")?, label.to_string()));
    }
    if out.is_empty() {
        return Err(table(1, "the table holds no point".into()));
    }
    Ok(out)
}

/// Counts reference points against the class raster.
fn tally_points(classes: &Path, points: &Path, limits: &Limits, t: &mut Tally) -> Result<()> {
    let pts = read_points(points, limits)?;
    let mut cr = GeoRaster::open(classes, limits)?;
    let ci = cr.info().clone();
    one_band(classes, ci.bands)?;
    let tf = affine(&ci.geo).ok_or_else(|| Error::InputData {
        path: classes.into(),
        message: "has no usable georeferencing, so map coordinates cannot be placed".into(),
    })?;
    let areas = PixelAreas::new(&ci.geo, ci.width, ci.height);
    // Points by pixel row, looked up while the class raster is read block by block.
    let mut by_row: Vec<(u32, u32, usize)> = Vec::new();
    for (k, (x, y, _)) in pts.iter().enumerate() {
        match pixel_of(&tf, *x, *y, ci.width, ci.height) {
            Some((c, r)) => by_row.push((r, c, k)),
            None => t.outside += 1,
        }
    }
    by_row.sort();
    let mut next = 0;
    for b in 0..cr.block_count() {
        let block = cr.read_block(b)?;
        for (i, &c) in block.data.iter().enumerate() {
            let class = class_of(classes, c)?;
            if class > 0 {
                let (col, row) = (i as u32 % ci.width, block.y0 + i as u32 / ci.width);
                t.map_pixel(class, &areas, col, row);
            }
        }
        while next < by_row.len() && by_row[next].0 < block.y0 + block.rows {
            let (r, c, k) = by_row[next];
            let v = block.data[((r - block.y0) * ci.width + c) as usize * ci.bands];
            let class = class_of(classes, v)?;
            if class == 0 {
                t.on_nodata += 1;
            } else {
                t.add(class, &pts[k].2);
            }
            next += 1;
        }
    }
    Ok(())
}

/// Orders labels: numerically when every label is a whole number, else as text.
fn label_order(labels: &[String]) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..labels.len()).collect();
    let nums: Option<Vec<i64>> = labels.iter().map(|l| l.parse().ok()).collect();
    match nums {
        Some(n) => idx.sort_by_key(|&i| n[i]),
        None => idx.sort_by(|&a, &b| labels[a].cmp(&labels[b])),
    }
    idx
}

/// Assesses `classes` (a class raster) against `reference`.
pub fn assess(
    classes: &Path,
    reference: &Reference,
    matching: Matching,
    limits: &Limits,
) -> Result<AssessmentDocument> {
    let mut t = Tally::new();
    let (ref_path, kind) = match reference {
        Reference::Raster(p) => {
            tally_raster(classes, p, limits, &mut t)?;
            (p, "raster")
        }
        Reference::Points(p) => {
            tally_points(classes, p, limits, &mut t)?;
            (p, "points")
        }
    };
    if t.labels.is_empty() {
        return Err(Error::InputData {
            path: ref_path.clone(),
            message: "no reference unit falls on a classified pixel".into(),
        });
    }
    // Reference labels in order; the table's columns follow.
    let order = label_order(&t.labels);
    let ref_labels: Vec<String> = order.iter().map(|&i| t.labels[i].clone()).collect();
    let present: Vec<usize> = (1..256).filter(|&c| t.class_pixels[c] > 0).collect();
    let table: Vec<Vec<u64>> = present
        .iter()
        .map(|&c| order.iter().map(|&j| t.table[c][j]).collect())
        .collect();
    let ari = adjusted_rand_index(&table);
    // A labelled map is compared by its labels' names when its labels document is beside
    // it; a class raster by its numbers.
    let names = match matching {
        Matching::Same => super::finish::label_names_beside(classes, limits)?,
        _ => None,
    };
    let name_of = |c: usize| -> String {
        names
            .as_ref()
            .and_then(|(_, n)| n.get(&c).cloned())
            .unwrap_or_else(|| c.to_string())
    };
    // Cluster → label.
    let majority = |r: &[u64]| {
        let best = (0..r.len()).max_by_key(|&j| (r[j], std::cmp::Reverse(j)))?;
        (r[best] > 0).then_some(best)
    };
    let chosen: Vec<Option<usize>> = match matching {
        Matching::Hungarian => hungarian_max(&table)
            .into_iter()
            .zip(&table)
            .map(|(m, r)| m.filter(|&j| r[j] > 0).or_else(|| majority(r)))
            .collect(),
        Matching::Majority => table.iter().map(|r| majority(r)).collect(),
        Matching::Same => present
            .iter()
            .map(|&c| ref_labels.iter().position(|l| *l == name_of(c)))
            .collect(),
    };
    let mut warnings = Vec::new();
    if matching == Matching::Same && chosen.iter().all(Option::is_none) {
        warnings.push(format!(
            "no map label ({}) equals any reference label ({}): every unit counts as an \
             error; name the map's classes (`landcover-label`) as the reference names them, \
             or match by agreement",
            present
                .iter()
                .map(|&c| name_of(c))
                .collect::<Vec<_>>()
                .join(", "),
            ref_labels.join(", ")
        ));
    }
    // Labels of the confusion matrix: the reference labels, then a row for each cluster
    // that got none (it has no reference unit, or no label equal to its number).
    let mut labels = ref_labels.clone();
    let mut row_of = Vec::with_capacity(present.len());
    let mut cluster_labels = Vec::with_capacity(present.len());
    for (k, &c) in present.iter().enumerate() {
        let i = match chosen[k] {
            Some(j) => j,
            None => {
                labels.push(match &names {
                    Some(_) => format!("map {}", name_of(c)),
                    None => format!("class {c}"),
                });
                labels.len() - 1
            }
        };
        row_of.push(i);
        cluster_labels.push(ClusterLabel {
            class: c,
            units: table[k].iter().sum(),
            label: labels[i].clone(),
        });
    }
    let q = labels.len();
    let mut counts = vec![vec![0u64; q]; q];
    let info = GeoRaster::open(classes, limits)?.info().clone();
    let areas = PixelAreas::new(&info.geo, info.width, info.height);
    let area_unit = if areas.is_known() { "m2" } else { "pixels" };
    let mut mapped_area = vec![0.0f64; q];
    for (k, &c) in present.iter().enumerate() {
        for (j, &n) in table[k].iter().enumerate() {
            counts[row_of[k]][j] += n;
        }
        mapped_area[row_of[k]] += if areas.is_known() {
            t.class_area[c]
        } else {
            t.class_pixels[c] as f64
        };
    }
    let confusion = Confusion { labels, counts };
    let name = |p: &Path| super::sample::source_name(p);
    Ok(AssessmentDocument {
        tool_version: crate::TOOL_VERSION.into(),
        caution: CAUTION.into(),
        classes: name(classes),
        reference: name(ref_path),
        reference_kind: kind.into(),
        matching,
        units: confusion.total(),
        points_outside: t.outside,
        points_on_nodata: t.on_nodata,
        adjusted_rand_index: ari,
        cluster_labels,
        overall_accuracy: confusion.overall_accuracy(),
        kappa: confusion.kappa(),
        per_label: confusion.per_label(),
        area_unit: area_unit.into(),
        area_method: areas.method.name().into(),
        areas: confusion.area_estimates(&mapped_area),
        map_label_names: names.map(|(file, _)| file),
        warnings,
        confusion,
    })
}

impl AssessmentDocument {
    /// Pretty JSON with a final newline.
    pub fn to_json(&self) -> String {
        format!(
            "{}\n",
            serde_json::to_string_pretty(self).expect("document serialises")
        )
    }

    /// The confusion matrix as CSV: a header of reference labels, one row per map label
    /// with its total and user's accuracy, then the reference totals and producer's
    /// accuracies.
    pub fn confusion_csv(&self) -> String {
        let esc = |s: &str| {
            if s.contains([',', '"', '\n']) {
                format!("\"{}\"", s.replace('"', "\"\""))
            } else {
                s.to_string()
            }
        };
        let c = &self.confusion;
        let opt = |v: Option<f64>| v.map(|x| format!("{x:.6}")).unwrap_or_default();
        let mut s = String::from("map \\ reference");
        for l in &c.labels {
            s.push(',');
            s.push_str(&esc(l));
        }
        s.push_str(",total,users_accuracy\n");
        for (i, row) in c.counts.iter().enumerate() {
            s.push_str(&esc(&c.labels[i]));
            for n in row {
                s.push_str(&format!(",{n}"));
            }
            let pl = &self.per_label[i];
            s.push_str(&format!(",{},{}\n", pl.mapped, opt(pl.users_accuracy)));
        }
        s.push_str("total");
        for pl in &self.per_label {
            s.push_str(&format!(",{}", pl.reference));
        }
        s.push_str(&format!(",{},\nproducers_accuracy", c.total()));
        for pl in &self.per_label {
            s.push_str(&format!(",{}", opt(pl.producers_accuracy)));
        }
        s.push_str(&format!(",,{}\n", opt(self.overall_accuracy)));
        s
    }
}

/// Output names of an assessment of `classes`: `STEM.assessment.json` and
/// `STEM.confusion.csv`, STEM without a final `.classes`.
pub fn assessment_names(classes: &Path) -> Result<[String; 2]> {
    let stem = crate::output::stem_of(classes)?;
    let stem = stem.strip_suffix(".classes").unwrap_or(&stem);
    Ok([
        format!("{stem}.assessment.json"),
        format!("{stem}.confusion.csv"),
    ])
}

/// Assesses and writes both outputs into `out_dir` (atomically).
pub fn assess_file(
    classes: &Path,
    reference: &Reference,
    matching: Matching,
    out_dir: &Path,
    limits: &Limits,
) -> Result<(AssessmentDocument, Vec<PathBuf>)> {
    let names = assessment_names(classes)?;
    let ref_path = match reference {
        Reference::Raster(p) | Reference::Points(p) => p.as_path(),
    };
    if ref_path == classes {
        return Err(ParamsError::Other("the reference is the class raster itself".into()).into());
    }
    crate::output::one_input(
        classes,
        out_dir,
        &[ref_path],
        &names,
        || assess(classes, reference, matching, limits),
        |doc, set| {
            set.write_bytes(&names[0], doc.to_json().as_bytes())?;
            set.write_bytes(&names[1], doc.confusion_csv().as_bytes())?;
            Ok(doc)
        },
    )
}
