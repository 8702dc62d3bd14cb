//! Ellipsoids by EPSG code (of the ellipsoid or of a geographic CRS).

/// An ellipsoid of revolution: semi-major axis `a` in metres and flattening `f`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ellipsoid {
    /// Semi-major axis, metres.
    pub a: f64,
    /// Flattening (a − b) / a.
    pub f: f64,
    /// A short name (`"WGS 84"`, `"GRS 1980"`, ...; `"user-defined"` from axes).
    pub name: &'static str,
}

impl Ellipsoid {
    /// WGS 84 (EPSG 7030): a = 6 378 137 m, 1/f = 298.257223563.
    pub const WGS84: Ellipsoid = Ellipsoid {
        a: 6_378_137.0,
        f: 1.0 / 298.257_223_563,
        name: "WGS 84",
    };
    /// GRS 1980 (EPSG 7019): a = 6 378 137 m, 1/f = 298.257222101.
    pub const GRS80: Ellipsoid = Ellipsoid {
        a: 6_378_137.0,
        f: 1.0 / 298.257_222_101,
        name: "GRS 1980",
    };
    /// Clarke 1866 (EPSG 7008): a = 6 378 206.4 m, b = 6 356 583.8 m.
    pub const CLARKE1866: Ellipsoid = Ellipsoid {
        a: 6_378_206.4,
        f: (6_378_206.4 - 6_356_583.8) / 6_378_206.4,
        name: "Clarke 1866",
    };
    /// International 1924 (EPSG 7022): a = 6 378 388 m, 1/f = 297.
    pub const INTL1924: Ellipsoid = Ellipsoid {
        a: 6_378_388.0,
        f: 1.0 / 297.0,
        name: "International 1924",
    };
    /// WGS 72 (EPSG 7043): a = 6 378 135 m, 1/f = 298.26.
    pub const WGS72: Ellipsoid = Ellipsoid {
        a: 6_378_135.0,
        f: 1.0 / 298.26,
        name: "WGS 72",
    };
    /// Bessel 1841 (EPSG 7004): a = 6 377 397.155 m, 1/f = 299.1528128.
    pub const BESSEL1841: Ellipsoid = Ellipsoid {
        a: 6_377_397.155,
        f: 1.0 / 299.152_812_8,
        name: "Bessel 1841",
    };
    /// Airy 1830 (EPSG 7001): a = 6 377 563.396 m, 1/f = 299.3249646.
    pub const AIRY1830: Ellipsoid = Ellipsoid {
        a: 6_377_563.396,
        f: 1.0 / 299.324_964_6,
        name: "Airy 1830",
    };
}

/// The ellipsoid of an EPSG ellipsoid code (70xx).
pub fn ellipsoid_by_code(code: u16) -> Option<Ellipsoid> {
    Some(match code {
        7030 => Ellipsoid::WGS84,
        7019 => Ellipsoid::GRS80,
        7008 => Ellipsoid::CLARKE1866,
        7022 => Ellipsoid::INTL1924,
        7043 => Ellipsoid::WGS72,
        7004 => Ellipsoid::BESSEL1841,
        7001 => Ellipsoid::AIRY1830,
        _ => return None,
    })
}

/// The ellipsoid of an EPSG geographic CRS code (WGS 84 4326, NAD83 4269, ETRS89 4258,
/// GDA94 4283, GDA2020 7844, SIRGAS 2000 4674, NAD83(CSRS) 4617, NAD27 4267, ED50 4230,
/// WGS 72 4322, DHDN 4314, OSGB36 4277).
pub fn ellipsoid_of_crs(code: u16) -> Option<Ellipsoid> {
    Some(match code {
        4326 => Ellipsoid::WGS84,
        4269 | 4258 | 4283 | 7844 | 4674 | 4617 => Ellipsoid::GRS80,
        4267 => Ellipsoid::CLARKE1866,
        4230 => Ellipsoid::INTL1924,
        4322 => Ellipsoid::WGS72,
        4314 => Ellipsoid::BESSEL1841,
        4277 => Ellipsoid::AIRY1830,
        _ => return None,
    })
}
