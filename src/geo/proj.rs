//! Map projections between WGS84 longitude/latitude and projected metres.
//!
//! A deliberately small set: Universal Transverse Mercator (north and south zones,
//! with automatic zone choice for a set of points), a Lambert azimuthal equal-area
//! projection centred where the caller wants (normally the study area), and
//! EPSG:3035 (ETRS89-LAEA Europe). UTM and EPSG:3035 are delegated to `proj4rs`, a pure
//! Rust port of PROJ (UTM uses its Poder/Engsager extended transverse Mercator, as
//! PROJ does); the centred equal-area projection is our own [`crate::geo::laea`], the
//! same code the hotspot grids use, so there is one implementation of it. No datum shift is applied anywhere: ETRS89 is treated as WGS84, which
//! it matches to better than a metre — far inside telemetry error. Longitudes and
//! latitudes are degrees at the API; the radian convention of `proj4rs` stays inside.

use std::sync::Arc;

use proj4rs::proj::Proj;
use thiserror::Error;

use super::laea::{Laea, WGS84_A, WGS84_E2};

/// Errors from building or applying a projection.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum ProjError {
    /// UTM zone outside 1..=60.
    #[error("UTM zone {zone} does not exist (zones are 1 to 60)")]
    Zone {
        /// Zone asked for.
        zone: u8,
    },
    /// A centre or input point that is not a valid longitude/latitude.
    #[error(
        "longitude {lon} / latitude {lat} is not a valid WGS84 position in degrees (longitude in [-180, 180], latitude in [-90, 90])"
    )]
    Coordinate {
        /// Longitude given.
        lon: f64,
        /// Latitude given.
        lat: f64,
    },
    /// A projected coordinate that cannot be inverted.
    #[error(
        "projected coordinate x={x}, y={y} cannot be converted back to longitude/latitude with {projection}; is it in the right coordinate system?"
    )]
    Projected {
        /// Easting given.
        x: f64,
        /// Northing given.
        y: f64,
        /// Projection description.
        projection: String,
    },
    /// No points to choose a zone or centre from.
    #[error("cannot choose a projection from an empty set of points")]
    NoPoints,
    /// The EPSG code is not one we support as a projection.
    #[error(
        "EPSG:{code} is not a supported projection; supported: UTM WGS84 EPSG:32601-32660 (north), EPSG:32701-32760 (south) and EPSG:3035 (ETRS89-LAEA)"
    )]
    Epsg {
        /// Code asked for.
        code: u32,
    },
    /// `proj4rs` rejected our definition (a bug on our side if it ever shows).
    #[error("projection {definition} could not be built: {detail}")]
    Definition {
        /// PROJ string.
        definition: String,
        /// Message from proj4rs.
        detail: String,
    },
}

/// Which projection a [`Projection`] is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ProjectionKind {
    /// UTM on WGS84; `south` adds the 10 000 km false northing.
    Utm {
        /// Zone 1..=60.
        zone: u8,
        /// Southern-hemisphere variant.
        south: bool,
    },
    /// Lambert azimuthal equal-area on WGS84 centred at (`lon0`, `lat0`), no false origin.
    Laea {
        /// Centre longitude, degrees.
        lon0: f64,
        /// Centre latitude, degrees.
        lat0: f64,
    },
    /// EPSG:3035, ETRS89-LAEA Europe (centre 10°E 52°N, false origin 4 321 000 / 3 210 000 m).
    Etrs89Laea,
}

/// A projection from WGS84 longitude/latitude (degrees) to metres and back.
///
/// # Examples
/// ```
/// use cairn::geo::proj::Projection;
/// let utm = Projection::utm(33, false).unwrap();
/// let (x, y) = utm.forward(15.0, 0.0).unwrap();
/// assert!((x - 500_000.0).abs() < 1e-6 && y.abs() < 1e-6);
/// let (lon, lat) = utm.inverse(x, y).unwrap();
/// assert!((lon - 15.0).abs() < 1e-9 && lat.abs() < 1e-9);
/// ```
#[derive(Clone)]
pub struct Projection {
    kind: ProjectionKind,
    engine: Engine,
}

/// What does the arithmetic of a [`Projection`].
#[derive(Clone)]
enum Engine {
    /// (geographic, projected) `proj4rs` definitions; shared so clones are cheap.
    Proj4(Arc<(Proj, Proj)>),
    /// Our own ellipsoidal LAEA.
    Laea(Laea),
}

impl std::fmt::Debug for Projection {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Projection")
            .field("kind", &self.kind)
            .finish()
    }
}

impl std::fmt::Display for Projection {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.kind {
            ProjectionKind::Utm { zone, south } => {
                write!(f, "UTM zone {zone}{}", if south { "S" } else { "N" })
            }
            ProjectionKind::Laea { lon0, lat0 } => {
                write!(
                    f,
                    "Lambert azimuthal equal-area centred at {lon0}°, {lat0}°"
                )
            }
            ProjectionKind::Etrs89Laea => f.write_str("EPSG:3035 (ETRS89-LAEA)"),
        }
    }
}

fn build(definition: &str) -> Result<Proj, ProjError> {
    Proj::from_proj_string(definition).map_err(|e| ProjError::Definition {
        definition: definition.to_string(),
        detail: e.to_string(),
    })
}

fn valid_lonlat(lon: f64, lat: f64) -> bool {
    lon.is_finite() && lat.is_finite() && lon.abs() <= 180.0 && lat.abs() <= 90.0
}

/// Circular mean of longitudes (degrees), so a set straddling ±180° centres on it.
fn mean_longitude(lons: &[f64]) -> f64 {
    let (s, c) = lons.iter().fold((0.0, 0.0), |(s, c), &l| {
        let r = l.to_radians();
        (s + r.sin(), c + r.cos())
    });
    if s == 0.0 && c == 0.0 {
        // Longitudes spread evenly round the globe: no meaningful centre; 0 is as good as any.
        0.0
    } else {
        s.atan2(c).to_degrees()
    }
}

fn check_points(lons: &[f64], lats: &[f64]) -> Result<(), ProjError> {
    if lons.is_empty() || lons.len() != lats.len() {
        return Err(ProjError::NoPoints);
    }
    match lons
        .iter()
        .zip(lats)
        .find(|(lon, lat)| !valid_lonlat(**lon, **lat))
    {
        Some((&lon, &lat)) => Err(ProjError::Coordinate { lon, lat }),
        None => Ok(()),
    }
}

impl Projection {
    fn new(kind: ProjectionKind, definition: &str) -> Result<Self, ProjError> {
        Ok(Projection {
            kind,
            engine: Engine::Proj4(Arc::new((
                build("+proj=longlat +ellps=WGS84 +no_defs")?,
                build(definition)?,
            ))),
        })
    }

    /// UTM zone `zone` (1..=60) on WGS84; `south` for the southern variant.
    ///
    /// # Errors
    /// [`ProjError::Zone`] for a zone outside 1..=60.
    pub fn utm(zone: u8, south: bool) -> Result<Self, ProjError> {
        if !(1..=60).contains(&zone) {
            return Err(ProjError::Zone { zone });
        }
        let def = format!(
            "+proj=utm +zone={zone}{} +ellps=WGS84 +units=m +no_defs",
            if south { " +south" } else { "" }
        );
        Self::new(ProjectionKind::Utm { zone, south }, &def)
    }

    /// The UTM zone for a set of points: the regular 6° zone holding their circular
    /// mean longitude, south variant when their mean latitude is negative.
    ///
    /// The Norway and Svalbard zone exceptions of the map-sheet grid are not applied:
    /// the aim is least distortion for the points, not map-sheet conventions. Scale
    /// error grows roughly as (Δλ cos φ)²/2 away from the central meridian — about
    /// 0.1 % at 3° from it on the equator (Snyder 1987, ch. 8).
    ///
    /// # Errors
    /// [`ProjError::NoPoints`] for empty or unequal inputs, [`ProjError::Coordinate`]
    /// for an invalid point.
    pub fn utm_for_points(lons: &[f64], lats: &[f64]) -> Result<Self, ProjError> {
        check_points(lons, lats)?;
        let lon = mean_longitude(lons);
        let zone = utm_zone(lon);
        let mean_lat = lats.iter().sum::<f64>() / lats.len() as f64;
        Self::utm(zone, mean_lat < 0.0)
    }

    /// Lambert azimuthal equal-area on WGS84 centred at (`lon0`, `lat0`), origin at the centre.
    ///
    /// # Errors
    /// [`ProjError::Coordinate`] for an invalid centre.
    pub fn laea(lon0: f64, lat0: f64) -> Result<Self, ProjError> {
        if !valid_lonlat(lon0, lat0) {
            return Err(ProjError::Coordinate {
                lon: lon0,
                lat: lat0,
            });
        }
        Ok(Projection {
            kind: ProjectionKind::Laea { lon0, lat0 },
            engine: Engine::Laea(Laea::new(lon0, lat0)),
        })
    }

    /// Lambert azimuthal equal-area centred on a set of points (circular mean
    /// longitude, mean latitude).
    ///
    /// # Errors
    /// As [`Projection::utm_for_points`].
    pub fn laea_for_points(lons: &[f64], lats: &[f64]) -> Result<Self, ProjError> {
        check_points(lons, lats)?;
        let lat = lats.iter().sum::<f64>() / lats.len() as f64;
        Self::laea(mean_longitude(lons), lat)
    }

    /// EPSG:3035, ETRS89-LAEA Europe (GRS80 ellipsoid, ETRS89 taken as WGS84).
    ///
    /// # Errors
    /// Only [`ProjError::Definition`], which would be a bug.
    pub fn etrs89_laea() -> Result<Self, ProjError> {
        Self::new(
            ProjectionKind::Etrs89Laea,
            "+proj=laea +lat_0=52 +lon_0=10 +x_0=4321000 +y_0=3210000 +ellps=GRS80 +units=m +no_defs",
        )
    }

    /// Projection for a supported EPSG code: 32601–32660, 32701–32760, 3035.
    ///
    /// # Errors
    /// [`ProjError::Epsg`] for any other code.
    pub fn from_epsg(code: u32) -> Result<Self, ProjError> {
        match code {
            32601..=32660 => Self::utm((code - 32600) as u8, false),
            32701..=32760 => Self::utm((code - 32700) as u8, true),
            3035 => Self::etrs89_laea(),
            _ => Err(ProjError::Epsg { code }),
        }
    }

    /// The EPSG code, when the projection has one.
    pub fn epsg(&self) -> Option<u32> {
        match self.kind {
            ProjectionKind::Utm { zone, south } => {
                Some(if south { 32700 } else { 32600 } + u32::from(zone))
            }
            ProjectionKind::Etrs89Laea => Some(3035),
            ProjectionKind::Laea { .. } => None,
        }
    }

    /// Which projection this is.
    pub fn kind(&self) -> ProjectionKind {
        self.kind
    }

    /// Longitude/latitude (degrees) to easting/northing (metres).
    ///
    /// # Errors
    /// [`ProjError::Coordinate`] for an invalid or unprojectable point (e.g. the
    /// antipode of a LAEA centre).
    pub fn forward(&self, lon: f64, lat: f64) -> Result<(f64, f64), ProjError> {
        let bad = || ProjError::Coordinate { lon, lat };
        if !valid_lonlat(lon, lat) {
            return Err(bad());
        }
        let (x, y) = match &self.engine {
            Engine::Laea(l) => l.forward(lon, lat),
            Engine::Proj4(procs) => {
                let mut p = (lon.to_radians(), lat.to_radians(), 0.0);
                proj4rs::transform::transform(&procs.0, &procs.1, &mut p).map_err(|_| bad())?;
                (p.0, p.1)
            }
        };
        if x.is_finite() && y.is_finite() {
            Ok((x, y))
        } else {
            Err(bad())
        }
    }

    /// Easting/northing (metres) to longitude/latitude (degrees).
    ///
    /// # Errors
    /// [`ProjError::Projected`] when the point has no inverse.
    pub fn inverse(&self, x: f64, y: f64) -> Result<(f64, f64), ProjError> {
        let bad = || ProjError::Projected {
            x,
            y,
            projection: self.to_string(),
        };
        if !(x.is_finite() && y.is_finite()) {
            return Err(bad());
        }
        let (lon, lat) = match &self.engine {
            Engine::Laea(l) => l.inverse(x, y),
            Engine::Proj4(procs) => {
                let mut p = (x, y, 0.0);
                proj4rs::transform::transform(&procs.1, &procs.0, &mut p).map_err(|_| bad())?;
                (p.0.to_degrees(), p.1.to_degrees())
            }
        };
        if valid_lonlat(lon, lat) {
            Ok((lon, lat))
        } else {
            Err(bad())
        }
    }
}

/// The regular 6° UTM zone (1..=60) holding a longitude in degrees; 180° is zone 60.
pub fn utm_zone(lon: f64) -> u8 {
    let z = ((lon + 180.0) / 6.0).floor() as i64 + 1;
    z.clamp(1, 60) as u8
}

/// Metres per degree of longitude and of latitude on the WGS84 ellipsoid at `lat`.
///
/// # Formula
/// Radii of curvature in the meridian M = a(1−e²)/(1−e² sin²φ)^{3/2} and in the prime
/// vertical N = a/(1−e² sin²φ)^{1/2} (Snyder 1987, *Map Projections — A Working
/// Manual*, USGS PP 1395, eqs. 4-18 and 4-20); one degree spans π/180·N cos φ metres
/// along the parallel and π/180·M along the meridian.
///
/// # Examples
/// ```
/// let (dlon, dlat) = cairn::geo::proj::metres_per_degree(0.0);
/// assert!((dlon - 111_319.491).abs() < 1e-3 && (dlat - 110_574.276).abs() < 1e-3);
/// ```
pub fn metres_per_degree(lat: f64) -> (f64, f64) {
    let phi = lat.to_radians();
    let w = 1.0 - WGS84_E2 * phi.sin().powi(2);
    let m = WGS84_A * (1.0 - WGS84_E2) / w.powf(1.5);
    let n = WGS84_A / w.sqrt();
    let k = std::f64::consts::PI / 180.0;
    (k * n * phi.cos(), k * m)
}
