//! The coordinate reference system of a GeoTIFF, as far as its GeoKeys tell it, and the map
//! from pixel positions to longitude and latitude on the CRS's own ellipsoid.
//!
//! Supported from the keys alone (no outside database):
//! - geographic CRSs in degrees (EPSG 4326 and the others listed in [`ellipsoid_of_crs`], or
//!   any geographic CRS whose ellipsoid is given by code or by its axes);
//! - Web Mercator (EPSG 3857 / 3785), inverted on the sphere of radius a and read as
//!   WGS 84 longitude and latitude, as the CRS defines it;
//! - transverse Mercator: UTM north and south on WGS 84 (326zz / 327zz), NAD83 (269zz),
//!   ETRS89 (258zz), NAD27 (267zz) and ED50 (230zz), and user-defined transverse Mercator
//!   from its parameters.
//!
//! Projected CRSs known to be equal-area (by EPSG code or by the projection method of a
//! user-defined CRS) keep the projected pixel size as the ground area. Any other CRS is
//! named, and areas are taken from the projected pixel size with a caveat, or not given.
//!
//! Longitude and latitude are on the CRS's own datum: no datum shift is applied (WGS 84,
//! GRS80-based ETRS89 and NAD83 agree within about 2 m; NAD27 and ED50 differ from WGS 84
//! by up to a few hundred metres).

use super::ellipsoid::{ellipsoid_by_code, ellipsoid_of_crs, Ellipsoid};
use super::tags::{GeoTagValue, GeoTags, TAG_GEO_DOUBLE_PARAMS, TAG_GEO_KEY_DIRECTORY};
use super::tm::TransverseMercator;

const KEY_MODEL_TYPE: u16 = 1024;
const KEY_RASTER_TYPE: u16 = 1025;
const KEY_GEOGRAPHIC_TYPE: u16 = 2048;
const KEY_GEOG_ANGULAR_UNITS: u16 = 2054;
const KEY_GEOG_ELLIPSOID: u16 = 2056;
const KEY_GEOG_SEMI_MAJOR: u16 = 2057;
const KEY_GEOG_SEMI_MINOR: u16 = 2058;
const KEY_GEOG_INV_FLATTENING: u16 = 2059;
const KEY_PROJECTED_CS: u16 = 3072;
const KEY_PROJ_COORD_TRANS: u16 = 3075;
const KEY_PROJ_LINEAR_UNITS: u16 = 3076;
const KEY_PROJ_NAT_ORIGIN_LONG: u16 = 3080;
const KEY_PROJ_NAT_ORIGIN_LAT: u16 = 3081;
const KEY_PROJ_FALSE_EASTING: u16 = 3082;
const KEY_PROJ_FALSE_NORTHING: u16 = 3083;
const KEY_PROJ_CENTER_LONG: u16 = 3088;
const KEY_PROJ_SCALE_AT_NAT_ORIGIN: u16 = 3092;
const USER_DEFINED: u16 = 32767;
const EPSG_METRE: u16 = 9001;
const EPSG_DEGREE: u16 = 9102;

/// Projected EPSG CRSs known to be equal-area: EASE-Grid 2.0 (6933, 6931, 6932), EASE-Grid
/// (3408, 3409, 3410), LAEA Europe (3035), CONUS Albers (5070), US National Atlas Equal Area
/// (2163).
pub fn is_equal_area_epsg(code: u16) -> bool {
    matches!(
        code,
        6933 | 6931 | 6932 | 3408 | 3409 | 3410 | 3035 | 5070 | 2163
    )
}

/// What the keys say the CRS is.
#[derive(Debug, Clone, PartialEq)]
pub enum Crs {
    /// Longitude/latitude in degrees on `ellipsoid`; `epsg` when given by code.
    Geographic {
        ellipsoid: Ellipsoid,
        epsg: Option<u16>,
    },
    /// Web Mercator (EPSG 3857): spherical Mercator of radius a on WGS 84 coordinates.
    WebMercator { epsg: u16 },
    /// Transverse Mercator (UTM or user-defined) in metres.
    TransverseMercator {
        tm: TransverseMercator,
        epsg: Option<u16>,
    },
    /// A projected CRS in metres known to be equal-area.
    EqualArea { epsg: Option<u16> },
    /// A projected CRS in metres that is not known to be equal-area.
    OtherProjected { epsg: Option<u16> },
    /// No usable CRS (no keys, other units, geocentric, or a form not handled).
    Unknown { why: String },
}

impl Crs {
    /// Reads the CRS from the GeoKeys.
    pub fn from_tags(geo: &GeoTags) -> Crs {
        let model = geo.geo_key(KEY_MODEL_TYPE);
        let pcs = geo.geo_key(KEY_PROJECTED_CS);
        let gcs = geo.geo_key(KEY_GEOGRAPHIC_TYPE);
        if geo.key_directory.is_none() {
            return Crs::Unknown {
                why: "no GeoKey directory".into(),
            };
        }
        match (model, pcs) {
            (Some(2), _) | (None, None) if gcs.is_some() || model == Some(2) => geographic(geo),
            (Some(1), _) | (None, Some(_)) => projected(geo),
            (Some(3), _) => Crs::Unknown {
                why: "geocentric model type".into(),
            },
            _ => Crs::Unknown {
                why: "no model type or CRS code in the GeoKeys".into(),
            },
        }
    }

    /// The EPSG code, when the CRS was given by one.
    pub fn epsg(&self) -> Option<u16> {
        match self {
            Crs::Geographic { epsg, .. }
            | Crs::TransverseMercator { epsg, .. }
            | Crs::EqualArea { epsg }
            | Crs::OtherProjected { epsg } => *epsg,
            Crs::WebMercator { epsg } => Some(*epsg),
            Crs::Unknown { .. } => None,
        }
    }

    /// A short description (`"EPSG:32633 transverse Mercator on WGS 84"`, ...).
    pub fn describe(&self) -> String {
        let code = |e: &Option<u16>| e.map_or("user-defined".to_string(), |c| format!("EPSG:{c}"));
        match self {
            Crs::Geographic { ellipsoid, epsg } => {
                format!("{} geographic on {}", code(epsg), ellipsoid.name)
            }
            Crs::WebMercator { epsg } => format!("EPSG:{epsg} Web Mercator"),
            Crs::TransverseMercator { tm, epsg } => {
                format!(
                    "{} transverse Mercator on {}",
                    code(epsg),
                    tm.ellipsoid.name
                )
            }
            Crs::EqualArea { epsg } => format!("{} equal-area projection", code(epsg)),
            Crs::OtherProjected { epsg } => format!("{} projection in metres", code(epsg)),
            Crs::Unknown { why } => format!("unknown CRS ({why})"),
        }
    }

    /// The ellipsoid longitude and latitude are on, when they can be computed.
    pub fn ellipsoid(&self) -> Option<Ellipsoid> {
        match self {
            Crs::Geographic { ellipsoid, .. } => Some(*ellipsoid),
            Crs::WebMercator { .. } => Some(Ellipsoid::WGS84),
            Crs::TransverseMercator { tm, .. } => Some(tm.ellipsoid),
            _ => None,
        }
    }

    /// Model coordinates (x, y) to (longitude, latitude) in degrees; `None` for CRSs not
    /// handled or points outside the projection's domain.
    pub fn to_lonlat(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (lon, lat) = match self {
            Crs::Geographic { .. } => (x, y),
            Crs::WebMercator { .. } => {
                let a = Ellipsoid::WGS84.a;
                ((x / a).to_degrees(), (y / a).sinh().atan().to_degrees())
            }
            Crs::TransverseMercator { tm, .. } => tm.inverse(x, y)?,
            _ => return None,
        };
        (lon.is_finite() && lat.is_finite() && lat.abs() <= 90.0).then_some((lon, lat))
    }
}

/// The value of a DOUBLE GeoKey (stored in GeoDoubleParams).
pub fn geo_key_double(geo: &GeoTags, id: u16) -> Option<f64> {
    let dir = match geo.key_directory.as_ref()? {
        GeoTagValue::Short(v) => v.clone(),
        GeoTagValue::Long(v) => v
            .iter()
            .map(|&x| u16::try_from(x).ok())
            .collect::<Option<_>>()?,
        _ => return None,
    };
    let n = *dir.get(3)? as usize;
    let entry = (0..n)
        .filter_map(|e| dir.get(4 + 4 * e..8 + 4 * e))
        .find(|e| e[0] == id)?;
    match entry[1] {
        TAG_GEO_DOUBLE_PARAMS => match geo.double_params.as_ref()? {
            GeoTagValue::Double(d) => d.get(entry[3] as usize).copied(),
            GeoTagValue::Float(d) => d.get(entry[3] as usize).map(|&v| v as f64),
            _ => None,
        },
        0 | TAG_GEO_KEY_DIRECTORY => geo.geo_key(id).map(f64::from),
        _ => None,
    }
}

fn ellipsoid_from_keys(geo: &GeoTags) -> Option<Ellipsoid> {
    if let Some(e) = geo.geo_key(KEY_GEOGRAPHIC_TYPE).and_then(ellipsoid_of_crs) {
        return Some(e);
    }
    if let Some(e) = geo.geo_key(KEY_GEOG_ELLIPSOID).and_then(ellipsoid_by_code) {
        return Some(e);
    }
    let a = geo_key_double(geo, KEY_GEOG_SEMI_MAJOR)?;
    let f = if let Some(inv) = geo_key_double(geo, KEY_GEOG_INV_FLATTENING) {
        if inv == 0.0 {
            0.0
        } else {
            1.0 / inv
        }
    } else {
        let b = geo_key_double(geo, KEY_GEOG_SEMI_MINOR)?;
        (a - b) / a
    };
    (a.is_finite() && a > 1.0e6 && (0.0..0.1).contains(&f)).then_some(Ellipsoid {
        a,
        f,
        name: "user-defined",
    })
}

fn geographic(geo: &GeoTags) -> Crs {
    let units = geo.geo_key(KEY_GEOG_ANGULAR_UNITS);
    if units.is_some_and(|u| u != EPSG_DEGREE) {
        return Crs::Unknown {
            why: format!(
                "geographic CRS in angular unit {}, not degrees",
                units.unwrap_or(0)
            ),
        };
    }
    let epsg = geo
        .geo_key(KEY_GEOGRAPHIC_TYPE)
        .filter(|&c| c != USER_DEFINED);
    match ellipsoid_from_keys(geo) {
        Some(ellipsoid) => Crs::Geographic { ellipsoid, epsg },
        None => Crs::Unknown {
            why: format!(
                "geographic CRS {} with no ellipsoid known here",
                epsg.map_or("user-defined".into(), |c| format!("EPSG:{c}"))
            ),
        },
    }
}

/// UTM zones by EPSG code: (ellipsoid, zone, south).
fn utm_zone(code: u16) -> Option<(Ellipsoid, u16, bool)> {
    Some(match code {
        32601..=32660 => (Ellipsoid::WGS84, code - 32600, false),
        32701..=32760 => (Ellipsoid::WGS84, code - 32700, true),
        26901..=26923 => (Ellipsoid::GRS80, code - 26900, false),
        25828..=25838 => (Ellipsoid::GRS80, code - 25800, false),
        26701..=26722 => (Ellipsoid::CLARKE1866, code - 26700, false),
        23028..=23038 => (Ellipsoid::INTL1924, code - 23000, false),
        _ => return None,
    })
}

fn projected(geo: &GeoTags) -> Crs {
    let pcs = geo.geo_key(KEY_PROJECTED_CS);
    let units = geo.geo_key(KEY_PROJ_LINEAR_UNITS);
    let epsg = pcs.filter(|&c| c != USER_DEFINED);
    if let Some(code) = epsg {
        if units.is_some_and(|u| u != EPSG_METRE) {
            return Crs::Unknown {
                why: format!(
                    "EPSG:{code} with linear unit {} (not metres)",
                    units.unwrap_or(0)
                ),
            };
        }
        if let Some((ellipsoid, zone, south)) = utm_zone(code) {
            return Crs::TransverseMercator {
                tm: TransverseMercator::utm(ellipsoid, zone, south),
                epsg,
            };
        }
        if code == 3857 || code == 3785 {
            return Crs::WebMercator { epsg: code };
        }
        if is_equal_area_epsg(code) {
            return Crs::EqualArea { epsg };
        }
        return Crs::OtherProjected { epsg };
    }
    if units != Some(EPSG_METRE) {
        return Crs::Unknown {
            why: "user-defined projection without metre units".into(),
        };
    }
    match geo.geo_key(KEY_PROJ_COORD_TRANS) {
        // CT_TransverseMercator
        Some(1) => {
            let Some(ellipsoid) = ellipsoid_from_keys(geo) else {
                return Crs::Unknown {
                    why: "user-defined transverse Mercator with no ellipsoid known here".into(),
                };
            };
            let lon0 = geo_key_double(geo, KEY_PROJ_NAT_ORIGIN_LONG)
                .or_else(|| geo_key_double(geo, KEY_PROJ_CENTER_LONG))
                .unwrap_or(0.0);
            let lat0 = geo_key_double(geo, KEY_PROJ_NAT_ORIGIN_LAT).unwrap_or(0.0);
            let k0 = geo_key_double(geo, KEY_PROJ_SCALE_AT_NAT_ORIGIN).unwrap_or(1.0);
            let fe = geo_key_double(geo, KEY_PROJ_FALSE_EASTING).unwrap_or(0.0);
            let fn_ = geo_key_double(geo, KEY_PROJ_FALSE_NORTHING).unwrap_or(0.0);
            Crs::TransverseMercator {
                tm: TransverseMercator::new(ellipsoid, lon0, lat0, k0, fe, fn_),
                epsg: None,
            }
        }
        // CT_LambertAzimEqualArea, CT_AlbersEqualArea, CT_CylindricalEqualArea
        Some(10 | 11 | 28) => Crs::EqualArea { epsg: None },
        _ => Crs::OtherProjected { epsg: None },
    }
}

/// The affine map from pixel positions (column, row; (0, 0) the top-left corner of the top-left
/// pixel) to model coordinates: `x = c[0] + c[1]·col + c[2]·row`, `y = c[3] + c[4]·col +
/// c[5]·row`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PixelToModel(pub [f64; 6]);

impl PixelToModel {
    /// From ModelPixelScale + one ModelTiepoint, or ModelTransformation. PixelIsPoint rasters
    /// (GTRasterTypeGeoKey 2) are shifted by half a pixel so that (0, 0) is a corner. `None`
    /// for GCP-only georeferencing (several tiepoints, no scale) or none.
    pub fn from_tags(geo: &GeoTags) -> Option<PixelToModel> {
        let reals = |v: &Option<GeoTagValue>| -> Option<Vec<f64>> {
            match v.as_ref()? {
                GeoTagValue::Double(d) => Some(d.clone()),
                GeoTagValue::Float(d) => Some(d.iter().map(|&x| x as f64).collect()),
                _ => None,
            }
        };
        let mut c = if let Some(m) = reals(&geo.transformation) {
            if m.len() != 16 {
                return None;
            }
            [m[3], m[0], m[1], m[7], m[4], m[5]]
        } else {
            let s = reals(&geo.pixel_scale)?;
            let t = reals(&geo.tiepoint)?;
            if t.len() != 6 || s.len() < 2 {
                return None;
            }
            let (sx, sy) = (s[0], s[1]);
            [t[3] - t[0] * sx, sx, 0.0, t[4] + t[1] * sy, 0.0, -sy]
        };
        if geo.geo_key(KEY_RASTER_TYPE) == Some(2) {
            c[0] -= 0.5 * (c[1] + c[2]);
            c[3] -= 0.5 * (c[4] + c[5]);
        }
        let det = c[1] * c[5] - c[2] * c[4];
        (c.iter().all(|v| v.is_finite()) && det != 0.0).then_some(PixelToModel(c))
    }

    /// Model coordinates of pixel position (col, row).
    pub fn apply(&self, col: f64, row: f64) -> (f64, f64) {
        let c = &self.0;
        (
            c[0] + c[1] * col + c[2] * row,
            c[3] + c[4] * col + c[5] * row,
        )
    }

    /// True when rows run along x and columns along y (no rotation or shear).
    pub fn is_north_up(&self) -> bool {
        self.0[2] == 0.0 && self.0[4] == 0.0
    }

    /// |determinant|: the area of one pixel in model units squared.
    pub fn pixel_model_area(&self) -> f64 {
        (self.0[1] * self.0[5] - self.0[2] * self.0[4]).abs()
    }
}

/// A raster's grid with its CRS: pixel positions to longitude and latitude.
#[derive(Debug, Clone, PartialEq)]
pub struct GridCrs {
    /// The CRS.
    pub crs: Crs,
    /// Pixel positions to model coordinates; `None` when the file has no affine
    /// georeferencing.
    pub transform: Option<PixelToModel>,
}

impl GridCrs {
    /// From the GeoTIFF tags.
    pub fn from_tags(geo: &GeoTags) -> GridCrs {
        GridCrs {
            crs: Crs::from_tags(geo),
            transform: PixelToModel::from_tags(geo),
        }
    }

    /// Longitude and latitude (degrees, on the CRS's ellipsoid) of pixel position (col, row):
    /// (0, 0) is the top-left corner of the top-left pixel, (0.5, 0.5) its centre.
    pub fn pixel_to_lonlat(&self, col: f64, row: f64) -> Option<(f64, f64)> {
        let (x, y) = self.transform?.apply(col, row);
        self.crs.to_lonlat(x, y)
    }
}
