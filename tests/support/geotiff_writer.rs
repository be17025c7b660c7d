//! GeoTIFF writing for tests and benches: the library's writer
//! ([`cairn::geo::raster_write`]) to a plain file, without compression.

// Each test crate that includes this file uses only some of the writers.
#![allow(dead_code)]

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use cairn::geo::raster_write::{
    Compression, GeoTiffLayout, GeoTiffWriteError, write_f32, write_u8,
};

/// Layout and georeferencing of a synthetic GeoTIFF (the library's layout).
pub type U8GeoTiff<'a> = GeoTiffLayout<'a>;

/// Write `data` (row-major, `width × height`) to `path` as a u8 GeoTIFF.
pub fn write_u8_geotiff(
    path: &Path,
    spec: &U8GeoTiff<'_>,
    data: &[u8],
) -> Result<(), GeoTiffWriteError> {
    let file = BufWriter::new(File::create(path).map_err(tiff::TiffError::from)?);
    write_u8(file, spec, data, Compression::None)
}

/// Write `data` (row-major, `width × height`) to `path` as a one-band f32 GeoTIFF with the
/// georeferencing of `spec` (its `nodata` text is written as GDAL's nodata tag).
pub fn write_f32_geotiff(
    path: &Path,
    spec: &U8GeoTiff<'_>,
    data: &[f32],
) -> Result<(), GeoTiffWriteError> {
    let file = BufWriter::new(File::create(path).map_err(tiff::TiffError::from)?);
    write_f32(file, spec, data, Compression::None)
}
