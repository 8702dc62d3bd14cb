//! GeoTIFF tags: the tag numbers, their values as stored, the GeoKey directory (model type,
//! projected CRS, linear units), consistency checks, and reading the tags and GDAL_NODATA from
//! a TIFF.

use super::decoder::{check_tag_fits, decode, guarded, tiff_decoder, unsupported};
use crate::error::Result;
use crate::limits::Limits;
use std::io::{Read, Seek};
use std::path::Path;
use tiff::decoder::ifd::Value;
use tiff::decoder::Decoder;
use tiff::tags::{Tag, Type};
use tiff::TiffError;

/// ModelPixelScaleTag (DOUBLE × 3): pixel size in CRS units along x, y, z.
pub const TAG_MODEL_PIXEL_SCALE: u16 = 33550;
/// ModelTiepointTag (DOUBLE × 6n): raster (i, j, k) ↔ model (x, y, z) point pairs.
pub const TAG_MODEL_TIEPOINT: u16 = 33922;
/// ModelTransformationTag (DOUBLE × 16): row-major 4 × 4 raster-to-model matrix.
pub const TAG_MODEL_TRANSFORMATION: u16 = 34264;
/// GeoKeyDirectoryTag (SHORT × 4(n+1)): the GeoKey header and entries.
pub const TAG_GEO_KEY_DIRECTORY: u16 = 34735;
/// GeoDoubleParamsTag (DOUBLE): values of DOUBLE GeoKeys.
pub const TAG_GEO_DOUBLE_PARAMS: u16 = 34736;
/// GeoAsciiParamsTag (ASCII): values of ASCII GeoKeys, each ended by `|`.
pub const TAG_GEO_ASCII_PARAMS: u16 = 34737;
/// GDAL_NODATA (ASCII): the no-data value of every band, as text.
pub const TAG_GDAL_NODATA: u16 = 42113;

/// The value of one GeoTIFF tag exactly as stored: the TIFF field type and its values.
///
/// Equality compares the type and the values; floating-point values compare by bit pattern, so
/// a NaN equals the same NaN and `0.0` differs from `-0.0`.
#[derive(Debug, Clone)]
pub enum GeoTagValue {
    /// TIFF SHORT (16-bit unsigned).
    Short(Vec<u16>),
    /// TIFF LONG (32-bit unsigned).
    Long(Vec<u32>),
    /// TIFF FLOAT (32-bit IEEE).
    Float(Vec<f32>),
    /// TIFF DOUBLE (64-bit IEEE).
    Double(Vec<f64>),
    /// TIFF ASCII, without the terminating NUL.
    Ascii(String),
}

impl PartialEq for GeoTagValue {
    fn eq(&self, other: &Self) -> bool {
        use GeoTagValue as V;
        match (self, other) {
            (V::Short(a), V::Short(b)) => a == b,
            (V::Long(a), V::Long(b)) => a == b,
            (V::Float(a), V::Float(b)) => {
                a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
            }
            (V::Double(a), V::Double(b)) => {
                a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
            }
            (V::Ascii(a), V::Ascii(b)) => a == b,
            _ => false,
        }
    }
}

impl GeoTagValue {
    /// The TIFF type name (`"SHORT"`, `"LONG"`, `"FLOAT"`, `"DOUBLE"`, `"ASCII"`).
    pub fn type_name(&self) -> &'static str {
        match self {
            GeoTagValue::Short(_) => "SHORT",
            GeoTagValue::Long(_) => "LONG",
            GeoTagValue::Float(_) => "FLOAT",
            GeoTagValue::Double(_) => "DOUBLE",
            GeoTagValue::Ascii(_) => "ASCII",
        }
    }

    /// Floating-point values (FLOAT or DOUBLE) as `f64`; `None` for other types.
    fn reals(&self) -> Option<Vec<f64>> {
        match self {
            GeoTagValue::Float(v) => Some(v.iter().map(|&x| x as f64).collect()),
            GeoTagValue::Double(v) => Some(v.clone()),
            _ => None,
        }
    }

    /// Integer values (SHORT, or LONG that fit 16 bits); `None` otherwise.
    fn shorts(&self) -> Option<Vec<u16>> {
        match self {
            GeoTagValue::Short(v) => Some(v.clone()),
            GeoTagValue::Long(v) => v.iter().map(|&x| u16::try_from(x).ok()).collect(),
            _ => None,
        }
    }
}

/// GeoTIFF tags copied verbatim from the input (OGC GeoTIFF 1.1): ModelPixelScale 33550,
/// ModelTiepoint 33922, ModelTransformation 34264, GeoKeyDirectory 34735, GeoDoubleParams 34736,
/// GeoAsciiParams 34737. `None` where the file has no such tag.
///
/// Equality means the same tags are present with the same TIFF types and the same values.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GeoTags {
    /// ModelPixelScaleTag (33550): pixel size (x, y, z) in CRS units.
    pub pixel_scale: Option<GeoTagValue>,
    /// ModelTiepointTag (33922): (i, j, k, x, y, z) tuples.
    pub tiepoint: Option<GeoTagValue>,
    /// ModelTransformationTag (34264): 16 values, row-major 4 × 4 matrix.
    pub transformation: Option<GeoTagValue>,
    /// GeoKeyDirectoryTag (34735).
    pub key_directory: Option<GeoTagValue>,
    /// GeoDoubleParamsTag (34736).
    pub double_params: Option<GeoTagValue>,
    /// GeoAsciiParamsTag (34737).
    pub ascii_params: Option<GeoTagValue>,
}

/// GeoKey ids used here.
const KEY_MODEL_TYPE: u16 = 1024;
const KEY_PROJECTED_CS: u16 = 3072;
const KEY_PROJ_LINEAR_UNITS: u16 = 3076;
/// EPSG unit code of the metre.
const EPSG_METRE: u16 = 9001;

fn is_utm_epsg(code: u16) -> bool {
    (32601..=32660).contains(&code) || (32701..=32760).contains(&code)
}

impl GeoTags {
    /// True when none of the six GeoTIFF tags is present.
    pub fn is_empty(&self) -> bool {
        self.slots().iter().all(|(_, v)| v.is_none())
    }

    /// The tags present, as (TIFF tag number, value), in ascending tag order.
    pub fn entries(&self) -> Vec<(u16, &GeoTagValue)> {
        self.slots()
            .into_iter()
            .filter_map(|(code, v)| v.map(|v| (code, v)))
            .collect()
    }

    fn slots(&self) -> [(u16, Option<&GeoTagValue>); 6] {
        [
            (TAG_MODEL_PIXEL_SCALE, self.pixel_scale.as_ref()),
            (TAG_MODEL_TIEPOINT, self.tiepoint.as_ref()),
            (TAG_MODEL_TRANSFORMATION, self.transformation.as_ref()),
            (TAG_GEO_KEY_DIRECTORY, self.key_directory.as_ref()),
            (TAG_GEO_DOUBLE_PARAMS, self.double_params.as_ref()),
            (TAG_GEO_ASCII_PARAMS, self.ascii_params.as_ref()),
        ]
    }

    fn slot_mut(&mut self, code: u16) -> Option<&mut Option<GeoTagValue>> {
        Some(match code {
            TAG_MODEL_PIXEL_SCALE => &mut self.pixel_scale,
            TAG_MODEL_TIEPOINT => &mut self.tiepoint,
            TAG_MODEL_TRANSFORMATION => &mut self.transformation,
            TAG_GEO_KEY_DIRECTORY => &mut self.key_directory,
            TAG_GEO_DOUBLE_PARAMS => &mut self.double_params,
            TAG_GEO_ASCII_PARAMS => &mut self.ascii_params,
            _ => return None,
        })
    }

    /// The value of a SHORT GeoKey (stored in the directory itself), e.g. `geo_key(1024)` for
    /// GTModelTypeGeoKey. `None` when the key is absent, stored elsewhere, or the directory is
    /// malformed.
    pub fn geo_key(&self, id: u16) -> Option<u16> {
        let dir = self.key_directory.as_ref()?.shorts()?;
        let n = *dir.get(3)? as usize;
        for e in 0..n {
            let entry = dir.get(4 + 4 * e..8 + 4 * e)?;
            if entry[0] != id {
                continue;
            }
            let (location, count, value) = (entry[1], entry[2], entry[3]);
            return match location {
                0 => Some(value),
                TAG_GEO_KEY_DIRECTORY if count == 1 => dir.get(value as usize).copied(),
                _ => None,
            };
        }
        None
    }

    /// Area of one pixel in square metres when the CRS is projected with metre units
    /// (GTModelTypeGeoKey 1024 = 1 and ProjLinearUnitsGeoKey 3076 = 9001, or a
    /// ProjectedCSTypeGeoKey 3072 in the EPSG UTM ranges 32601–32660 / 32701–32760 with no
    /// linear-units key); from ModelPixelScale (sx·sy) or |det| of the 2×2 part of
    /// ModelTransformation. `None` otherwise (geographic CRS, unknown units, no georeferencing,
    /// or values that are not finite and positive).
    pub fn pixel_area_m2(&self) -> Option<f64> {
        let model = self.geo_key(KEY_MODEL_TYPE);
        let units = self.geo_key(KEY_PROJ_LINEAR_UNITS);
        let utm = self.geo_key(KEY_PROJECTED_CS).is_some_and(is_utm_epsg);
        let projected = model == Some(1) || (model.is_none() && utm);
        let metres = units == Some(EPSG_METRE) || (units.is_none() && utm);
        if !(projected && metres) {
            return None;
        }
        let area = if let Some(scale) = &self.pixel_scale {
            let s = scale.reals()?;
            let (sx, sy) = (*s.first()?, *s.get(1)?);
            if !(sx.is_finite() && sy.is_finite() && sx > 0.0 && sy > 0.0) {
                return None;
            }
            sx * sy
        } else {
            let m = self.transformation.as_ref()?.reals()?;
            if m.len() != 16 {
                return None;
            }
            (m[0] * m[5] - m[1] * m[4]).abs()
        };
        (area.is_finite() && area > 0.0).then_some(area)
    }

    /// Checks consistency: pixel scale values finite and > 0 (x, y), tiepoints a multiple of 6
    /// finite values, transformation 16 finite values with a non-zero determinant (of its 2×2
    /// part), GeoKeyDirectory header sane (version 1, count matches length, every key's value
    /// inside the tag it points to), not both ModelPixelScale+ModelTiepoint AND
    /// ModelTransformation, and each tag of a TIFF type the standard allows. `Err(message)`
    /// names the first problem found.
    pub fn validate(&self) -> std::result::Result<(), String> {
        let reals = |name: &str, v: &GeoTagValue| {
            v.reals().ok_or_else(|| {
                format!(
                    "{name} has TIFF type {}, expected DOUBLE (or FLOAT)",
                    v.type_name()
                )
            })
        };
        if let Some(v) = &self.pixel_scale {
            let s = reals("ModelPixelScale", v)?;
            if !(2..=3).contains(&s.len()) {
                return Err(format!(
                    "ModelPixelScale has {} values, expected 3",
                    s.len()
                ));
            }
            if let Some(bad) = s.iter().find(|x| !x.is_finite()) {
                return Err(format!("ModelPixelScale holds a non-finite value ({bad})"));
            }
            if s[0] <= 0.0 || s[1] <= 0.0 {
                return Err(format!(
                    "ModelPixelScale x and y must be > 0 (got {} and {})",
                    s[0], s[1]
                ));
            }
        }
        if let Some(v) = &self.tiepoint {
            let t = reals("ModelTiepoint", v)?;
            if t.is_empty() || t.len() % 6 != 0 {
                return Err(format!(
                    "ModelTiepoint has {} values, expected a non-zero multiple of 6",
                    t.len()
                ));
            }
            if let Some(bad) = t.iter().find(|x| !x.is_finite()) {
                return Err(format!("ModelTiepoint holds a non-finite value ({bad})"));
            }
        }
        if let Some(v) = &self.transformation {
            let m = reals("ModelTransformation", v)?;
            if m.len() != 16 {
                return Err(format!(
                    "ModelTransformation has {} values, expected 16",
                    m.len()
                ));
            }
            if let Some(bad) = m.iter().find(|x| !x.is_finite()) {
                return Err(format!(
                    "ModelTransformation holds a non-finite value ({bad})"
                ));
            }
            let det = m[0] * m[5] - m[1] * m[4];
            if det == 0.0 || !det.is_finite() {
                return Err(
                    "ModelTransformation is singular (its 2x2 part has determinant 0)".into(),
                );
            }
        }
        if self.transformation.is_some() && (self.pixel_scale.is_some() || self.tiepoint.is_some())
        {
            return Err(
                "both ModelTransformation and ModelPixelScale/ModelTiepoint are present; \
                 the georeferencing is ambiguous"
                    .into(),
            );
        }
        if let Some(v) = &self.double_params {
            reals("GeoDoubleParams", v)?;
        }
        let ascii_len = match &self.ascii_params {
            None => None,
            Some(GeoTagValue::Ascii(s)) => Some(s.len()),
            Some(v) => {
                return Err(format!(
                    "GeoAsciiParams has TIFF type {}, expected ASCII",
                    v.type_name()
                ))
            }
        };
        if let Some(v) = &self.key_directory {
            let dir = v.shorts().ok_or_else(|| {
                format!(
                    "GeoKeyDirectory has TIFF type {} (or values over 65535), expected SHORT",
                    v.type_name()
                )
            })?;
            if dir.len() < 4 {
                return Err(format!(
                    "GeoKeyDirectory has {} values, fewer than its 4-value header",
                    dir.len()
                ));
            }
            if dir[0] != 1 {
                return Err(format!("GeoKeyDirectory version is {}, expected 1", dir[0]));
            }
            let n = dir[3] as usize;
            if dir.len() != 4 + 4 * n {
                return Err(format!(
                    "GeoKeyDirectory declares {n} keys ({} values) but holds {} values",
                    4 + 4 * n,
                    dir.len()
                ));
            }
            let doubles = self
                .double_params
                .as_ref()
                .and_then(|d| d.reals())
                .map(|d| d.len());
            for entry in dir[4..].chunks_exact(4) {
                let (id, location, count, offset) = (entry[0], entry[1], entry[2], entry[3]);
                let end = offset as usize + count as usize;
                let fits = match location {
                    0 => count == 1,
                    TAG_GEO_KEY_DIRECTORY => end <= dir.len(),
                    TAG_GEO_DOUBLE_PARAMS => doubles.is_some_and(|len| end <= len),
                    // The count of an ASCII key includes its `|`; tolerate a counted NUL.
                    TAG_GEO_ASCII_PARAMS => ascii_len.is_some_and(|len| end <= len + 1),
                    _ => {
                        return Err(format!(
                            "GeoKey {id} points to tag {location}, which is not a GeoTIFF tag"
                        ))
                    }
                };
                if !fits {
                    return Err(format!(
                        "GeoKey {id} (location {location}, count {count}, offset {offset}) \
                         points outside its values"
                    ));
                }
            }
        }
        Ok(())
    }
}

pub(super) fn geo_tag_name(code: u16) -> &'static str {
    match code {
        TAG_MODEL_PIXEL_SCALE => "ModelPixelScale",
        TAG_MODEL_TIEPOINT => "ModelTiepoint",
        TAG_MODEL_TRANSFORMATION => "ModelTransformation",
        TAG_GEO_KEY_DIRECTORY => "GeoKeyDirectory",
        TAG_GEO_DOUBLE_PARAMS => "GeoDoubleParams",
        TAG_GEO_ASCII_PARAMS => "GeoAsciiParams",
        TAG_GDAL_NODATA => "GDAL_NODATA",
        _ => "tag",
    }
}

fn flatten(v: Value) -> Vec<Value> {
    match v {
        Value::List(items) => items.into_iter().flat_map(flatten).collect(),
        other => vec![other],
    }
}

fn convert_all<T>(
    values: Vec<Value>,
    f: impl Fn(Value) -> tiff::TiffResult<T>,
) -> tiff::TiffResult<Vec<T>> {
    values.into_iter().map(f).collect()
}

pub(super) fn read_geo<R: Read + Seek>(decoder: &mut Decoder<R>, path: &Path) -> Result<GeoTags> {
    let mut geo = GeoTags::default();
    for code in [
        TAG_MODEL_PIXEL_SCALE,
        TAG_MODEL_TIEPOINT,
        TAG_MODEL_TRANSFORMATION,
        TAG_GEO_KEY_DIRECTORY,
        TAG_GEO_DOUBLE_PARAMS,
        TAG_GEO_ASCII_PARAMS,
    ] {
        let tag = Tag::from_u16_exhaustive(code);
        let Some(entry) = decoder.image_ifd().find_entry(tag) else {
            continue;
        };
        let name = geo_tag_name(code);
        check_tag_fits(decoder, tag, &format!("{name} ({code})"), path)?;
        let bad = |e: TiffError| {
            decode(
                path,
                format!("cannot read GeoTIFF tag {name} ({code}): {e}"),
            )
        };
        let Some(value) = decoder.find_tag(tag).map_err(bad)? else {
            continue;
        };
        let parsed = match entry.field_type() {
            Type::SHORT => {
                GeoTagValue::Short(convert_all(flatten(value), Value::into_u16).map_err(bad)?)
            }
            Type::LONG => {
                GeoTagValue::Long(convert_all(flatten(value), Value::into_u32).map_err(bad)?)
            }
            Type::FLOAT => {
                GeoTagValue::Float(convert_all(flatten(value), Value::into_f32).map_err(bad)?)
            }
            Type::DOUBLE => {
                GeoTagValue::Double(convert_all(flatten(value), Value::into_f64).map_err(bad)?)
            }
            Type::ASCII => GeoTagValue::Ascii(value.into_string().map_err(bad)?),
            other => {
                return Err(unsupported(
                    path,
                    format!(
                        "GeoTIFF tag {name} ({code}) has TIFF type {other:?}; \
                         SHORT, LONG, FLOAT, DOUBLE or ASCII expected"
                    ),
                ))
            }
        };
        if let Some(slot) = geo.slot_mut(code) {
            *slot = Some(parsed);
        }
    }
    Ok(geo)
}

/// Parses a GDAL_NODATA text ("0", "-9999", "nan", "-inf", " 1e-3 ").
pub fn parse_nodata(text: &str) -> Option<f64> {
    let t = text.trim_matches(|c: char| c.is_whitespace() || c == '\0');
    t.parse::<f64>().ok()
}

pub(super) fn read_nodata<R: Read + Seek>(
    decoder: &mut Decoder<R>,
    path: &Path,
) -> Result<Option<f64>> {
    let tag = Tag::from_u16_exhaustive(TAG_GDAL_NODATA);
    check_tag_fits(decoder, tag, "GDAL_NODATA (42113)", path)?;
    let Some(value) = decoder
        .find_tag(tag)
        .map_err(|e| decode(path, format!("cannot read GDAL_NODATA (42113): {e}")))?
    else {
        return Ok(None);
    };
    let text = value
        .into_string()
        .map_err(|_| decode(path, "GDAL_NODATA (42113) is not ASCII text"))?;
    parse_nodata(&text).map(Some).ok_or_else(|| {
        decode(
            path,
            format!("GDAL_NODATA (42113) value {text:?} is not a number"),
        )
    })
}

/// Reads the GeoTags of the first image of any TIFF file (for tests: compare input and output
/// tags). A TIFF without GeoTIFF tags gives empty [`GeoTags`].
pub fn read_geotags(path: &Path) -> Result<GeoTags> {
    guarded(path, "reading GeoTIFF tags", || {
        let mut decoder = tiff_decoder(path, None, &Limits::default())?;
        read_geo(&mut decoder, path)
    })
}
