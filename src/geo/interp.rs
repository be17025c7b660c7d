//! Bilinear interpolation of continuous rasters between pixel centres.
//!
//! Values are known at cell centres; a location takes the bilinear blend of the four
//! centres around it. Inside the raster but beyond the outermost centres (the outer
//! half-cell rim) the location is clamped onto the hull of the centres, so the rim
//! repeats the edge interpolation along the edge instead of being lost. A location
//! outside the raster extent, or one whose blend would give weight to a nodata (or
//! NaN) cell, gets no value and says which of the two it was; a centre exactly on a
//! valid cell needs no neighbour, so a nodata neighbour with zero weight is ignored.

use rayon::prelude::*;

use super::raster::Raster;

/// Why a location has no interpolated value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Missing {
    /// Outside the raster extent.
    OutsideRaster,
    /// A cell with non-zero weight is nodata.
    Nodata,
    /// The longitude/latitude is invalid or cannot be projected to the raster's system.
    Coordinate,
}

impl Missing {
    /// Stable label for tables.
    pub fn label(self) -> &'static str {
        match self {
            Missing::OutsideRaster => "outside_raster",
            Missing::Nodata => "nodata",
            Missing::Coordinate => "invalid_coordinate",
        }
    }
}

/// Bilinear value at (x, y) in the raster's coordinates.
///
/// # Formula
/// With continuous pixel coordinates (u, v) (centres at integer + ½), i = ⌊u − ½⌋,
/// j = ⌊v − ½⌋, s = u − ½ − i, t = v − ½ − j:
/// f = (1−s)(1−t) z(i, j) + s(1−t) z(i+1, j) + (1−s)t z(i, j+1) + st z(i+1, j+1)
/// (Press et al. 2007, *Numerical Recipes*, 3rd ed., eq. 3.6.5).
///
/// # Errors
/// [`Missing::OutsideRaster`], [`Missing::Nodata`], or [`Missing::Coordinate`] for
/// non-finite input.
///
/// # Examples
/// ```
/// use cairn::geo::interp::bilinear;
/// use cairn::geo::raster::{GeoTransform, Raster, RasterCrs, RasterData};
/// let t = GeoTransform { x0: 0.0, y0: 2.0, dx: 1.0, dy: -1.0 };
/// let r = Raster::from_parts("demo", 2, 2, t, RasterCrs::Geographic, None,
///     RasterData::F32(vec![0.0, 1.0, 2.0, 3.0])).unwrap();
/// assert_eq!(bilinear(&r, 1.0, 1.0), Ok(1.5)); // middle of the four centres
/// ```
pub fn bilinear(raster: &Raster, x: f64, y: f64) -> Result<f64, Missing> {
    if !(x.is_finite() && y.is_finite()) {
        return Err(Missing::Coordinate);
    }
    let (w, h) = (raster.width(), raster.height());
    let (u, v) = raster.transform().to_pixel(x, y);
    if !(u >= 0.0 && v >= 0.0 && u <= w as f64 && v <= h as f64) {
        return Err(Missing::OutsideRaster);
    }
    let axis = |p: f64, n: usize| -> (usize, usize, f64) {
        let q = (p - 0.5).clamp(0.0, (n - 1) as f64);
        let i = (q.floor() as usize).min(n.saturating_sub(2));
        let frac = q - i as f64;
        (i, (i + 1).min(n - 1), frac)
    };
    let (c0, c1, s) = axis(u, w);
    let (r0, r1, t) = axis(v, h);
    let corners = [
        (c0, r0, (1.0 - s) * (1.0 - t)),
        (c1, r0, s * (1.0 - t)),
        (c0, r1, (1.0 - s) * t),
        (c1, r1, s * t),
    ];
    let mut acc = 0.0;
    for (c, r, wgt) in corners {
        if wgt == 0.0 {
            continue;
        }
        acc += wgt * raster.cell_value(c, r).ok_or(Missing::Nodata)?;
    }
    Ok(acc)
}

/// Bilinear value at a WGS84 longitude/latitude.
///
/// # Errors
/// As [`bilinear`]; [`Missing::Coordinate`] when the position cannot be converted.
pub fn bilinear_lonlat(raster: &Raster, lon: f64, lat: f64) -> Result<f64, Missing> {
    let (x, y) = raster
        .crs()
        .from_lonlat(lon, lat)
        .map_err(|_| Missing::Coordinate)?;
    bilinear(raster, x, y)
}

/// [`bilinear_lonlat`] for many locations, in input order (rayon).
///
/// # Panics
/// When `lons` and `lats` differ in length.
pub fn bilinear_many_lonlat(
    raster: &Raster,
    lons: &[f64],
    lats: &[f64],
) -> Vec<Result<f64, Missing>> {
    let (xs, ys) = raster.crs().from_lonlat_many(lons, lats);
    bilinear_many_xy(raster, &xs, &ys)
}

/// [`bilinear`] for many points in the raster's coordinates, in input order (rayon);
/// non-finite coordinates give [`Missing::Coordinate`].
///
/// # Panics
/// When `xs` and `ys` differ in length.
pub fn bilinear_many_xy(raster: &Raster, xs: &[f64], ys: &[f64]) -> Vec<Result<f64, Missing>> {
    assert_eq!(xs.len(), ys.len(), "one y per x");
    xs.par_iter()
        .zip(ys.par_iter())
        .map(|(&x, &y)| bilinear(raster, x, y))
        .collect()
}
