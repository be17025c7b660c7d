//! Geographic building blocks for covariates: sun position and diel phase, map
//! projections, GeoTIFF rasters (read and written), class proportions in a radius, and bilinear
//! interpolation of continuous layers.
//!
//! Everything here works on plain numbers and returns typed results: a location that
//! cannot be annotated (outside a raster, on nodata, an invalid coordinate) says why
//! instead of receiving a made-up value. Longitudes and latitudes are WGS84 degrees;
//! projected coordinates are metres; instants are UTC. Heavy per-location work (sun
//! positions, raster lookups) is spread over rayon's pool with results that do not
//! depend on the number of threads.

pub mod focal;
pub mod geodesic;
pub mod interp;
pub mod laea;
pub mod proj;
pub mod raster;
pub mod raster_write;
pub mod sun;
