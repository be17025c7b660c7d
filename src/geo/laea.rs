//! Lambert azimuthal equal-area projection on the WGS84 ellipsoid, oblique aspect: the
//! one implementation behind [`crate::geo::proj::Projection::laea`] (the smoother's
//! working plane) and the hotspot grids, whose cells all have the same true area.
//!
//! Written here rather than taken from a projection library because it is small,
//! infallible away from the antipode of the centre, and runs once per fix; the formulas
//! are the published ellipsoidal ones and the tests compare against an independent
//! implementation (PROJ through pyproj, fixtures `tests/fixtures/laea_grid/` and
//! `tests/fixtures/projections/`).
//!
//! # Formula
//! Snyder, J. P. (1987), *Map Projections — A Working Manual*, USGS Professional
//! Paper 1395, pp. 187–190: authalic latitude β from q(φ) (eq. 3-12, 3-11), Rq
//! (3-13), D (24-20), B (24-19), forward x, y (24-17, 24-18); inverse ρ (24-28),
//! cₑ (24-29), q (24-30), λ (24-26), and φ from q by the series 3-18 refined with the
//! Newton-type iteration 3-16.

/// WGS84 semi-major axis, metres.
pub const WGS84_A: f64 = 6_378_137.0;
/// WGS84 flattening.
pub const WGS84_F: f64 = 1.0 / 298.257_223_563;
/// WGS84 first eccentricity squared, e² = f(2 − f).
pub const WGS84_E2: f64 = WGS84_F * (2.0 - WGS84_F);

/// An oblique Lambert azimuthal equal-area projection centred on (lon0, lat0).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Laea {
    lon0_deg: f64,
    lat0_deg: f64,
    #[serde(skip)]
    e: f64,
    #[serde(skip)]
    e2: f64,
    #[serde(skip)]
    qp: f64,
    #[serde(skip)]
    rq: f64,
    #[serde(skip)]
    d: f64,
    #[serde(skip)]
    sin_b1: f64,
    #[serde(skip)]
    cos_b1: f64,
}

impl Laea {
    /// Projection centred on `lon0_deg`, `lat0_deg` (degrees) on the WGS84 ellipsoid.
    ///
    /// Centres within 1e-9° of a pole are moved off it by that amount: the oblique
    /// formulas divide by cos β₁ (Snyder gives separate polar-aspect formulas, not
    /// needed for tracking studies, which never centre a grid on a pole).
    pub fn new(lon0_deg: f64, lat0_deg: f64) -> Self {
        let lat0_deg = lat0_deg.clamp(-90.0 + 1e-9, 90.0 - 1e-9);
        let e2 = WGS84_E2;
        let e = e2.sqrt();
        let qp = q_of(1.0, e, e2);
        let rq = WGS84_A * (qp / 2.0).sqrt();
        let phi1 = lat0_deg.to_radians();
        let (s1, c1) = phi1.sin_cos();
        let b1 = (q_of(s1, e, e2) / qp).clamp(-1.0, 1.0).asin();
        let m1 = c1 / (1.0 - e2 * s1 * s1).sqrt();
        let d = WGS84_A * m1 / (rq * b1.cos());
        Laea {
            lon0_deg,
            lat0_deg,
            e,
            e2,
            qp,
            rq,
            d,
            sin_b1: b1.sin(),
            cos_b1: b1.cos(),
        }
    }

    /// Centre longitude, degrees.
    pub fn lon0_deg(&self) -> f64 {
        self.lon0_deg
    }
    /// Centre latitude, degrees.
    pub fn lat0_deg(&self) -> f64 {
        self.lat0_deg
    }

    /// PROJ string describing the same projection (for GIS users).
    pub fn proj_string(&self) -> String {
        format!(
            "+proj=laea +lat_0={} +lon_0={} +x_0=0 +y_0=0 +ellps=WGS84 +units=m +no_defs",
            self.lat0_deg, self.lon0_deg
        )
    }

    /// Project (lon, lat) in degrees to (x, y) in metres.
    pub fn forward(&self, lon_deg: f64, lat_deg: f64) -> (f64, f64) {
        let (s, _) = lat_deg.to_radians().sin_cos();
        let beta = (q_of(s, self.e, self.e2) / self.qp).clamp(-1.0, 1.0).asin();
        let (sb, cb) = beta.sin_cos();
        let (sl, cl) = wrap_rad((lon_deg - self.lon0_deg).to_radians()).sin_cos();
        let denom = 1.0 + self.sin_b1 * sb + self.cos_b1 * cb * cl;
        // denom → 0 only at the antipode of the centre, where the projection is
        // undefined; tracking studies are far from it.
        let b = self.rq * (2.0 / denom).sqrt();
        let x = b * self.d * cb * sl;
        let y = (b / self.d) * (self.cos_b1 * sb - self.sin_b1 * cb * cl);
        (x, y)
    }

    /// Inverse: (x, y) in metres to (lon, lat) in degrees; NaN for a point outside the
    /// projection's disk (farther from the centre than the image of its antipode).
    pub fn inverse(&self, x: f64, y: f64) -> (f64, f64) {
        let rho = ((x / self.d).powi(2) + (self.d * y).powi(2)).sqrt();
        if rho < 1e-12 {
            return (self.lon0_deg, self.lat0_deg);
        }
        let sin_half = rho / (2.0 * self.rq);
        if sin_half.is_nan() || sin_half > 1.0 + 1e-12 {
            return (f64::NAN, f64::NAN);
        }
        let ce = 2.0 * sin_half.min(1.0).asin();
        let (sc, cc) = ce.sin_cos();
        let q = self.qp * (cc * self.sin_b1 + self.d * y * sc * self.cos_b1 / rho);
        let beta = (q / self.qp).clamp(-1.0, 1.0).asin();
        let lam = (x * sc)
            .atan2(self.d * rho * self.cos_b1 * cc - self.d * self.d * y * self.sin_b1 * sc);
        let phi = self.lat_from_q(q, beta);
        let lon = wrap_rad(self.lon0_deg.to_radians() + lam).to_degrees();
        (lon, phi.to_degrees())
    }

    /// Geodetic latitude (radians) from q: Snyder series 3-18 as a start, then
    /// iteration 3-16 until the change is below 1e-15 rad (at most a few steps).
    fn lat_from_q(&self, q: f64, beta: f64) -> f64 {
        let e2 = self.e2;
        let e4 = e2 * e2;
        let e6 = e4 * e2;
        let mut phi = beta
            + (e2 / 3.0 + 31.0 * e4 / 180.0 + 517.0 * e6 / 5040.0) * (2.0 * beta).sin()
            + (23.0 * e4 / 360.0 + 251.0 * e6 / 3780.0) * (4.0 * beta).sin()
            + (761.0 * e6 / 45360.0) * (6.0 * beta).sin();
        for _ in 0..5 {
            let (s, c) = phi.sin_cos();
            if c.abs() < 1e-12 {
                break;
            }
            let es = self.e * s;
            let one = 1.0 - e2 * s * s;
            let dphi = one * one / (2.0 * c)
                * (q / (1.0 - e2) - s / one
                    + (1.0 / (2.0 * self.e)) * ((1.0 - es) / (1.0 + es)).ln());
            phi += dphi;
            if dphi.abs() < 1e-15 {
                break;
            }
        }
        phi
    }
}

/// Snyder eq. 3-12: q = (1 − e²)[sin φ/(1 − e² sin² φ) − 1/(2e) ln((1 − e sin φ)/(1 + e sin φ))].
fn q_of(sin_phi: f64, e: f64, e2: f64) -> f64 {
    let es = e * sin_phi;
    (1.0 - e2) * (sin_phi / (1.0 - es * es) - (1.0 / (2.0 * e)) * ((1.0 - es) / (1.0 + es)).ln())
}

/// Wrap an angle to (−π, π].
fn wrap_rad(a: f64) -> f64 {
    let tau = std::f64::consts::TAU;
    let mut r = a % tau;
    if r > std::f64::consts::PI {
        r -= tau;
    } else if r <= -std::f64::consts::PI {
        r += tau;
    }
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_is_exact_to_a_micrometre() {
        let p = Laea::new(12.0, 52.0);
        for &(lon, lat) in &[
            (12.0, 52.0),
            (3.5, 41.2),
            (25.0, 67.0),
            (-5.0, 36.0),
            (12.0, 80.0),
        ] {
            let (x, y) = p.forward(lon, lat);
            let (lon2, lat2) = p.inverse(x, y);
            assert!(
                (lon - lon2).abs() < 1e-11 && (lat - lat2).abs() < 1e-11,
                "{lon},{lat}"
            );
        }
    }

    #[test]
    fn centre_maps_to_origin() {
        let p = Laea::new(-70.0, -33.0);
        let (x, y) = p.forward(-70.0, -33.0);
        assert!(x.abs() < 1e-6 && y.abs() < 1e-6);
    }
}
