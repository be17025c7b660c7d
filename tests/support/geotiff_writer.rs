//! Minimal GeoTIFF writer for large synthetic rasters in tests and benches (u8 or f32,
//! one band, strips, no compression; scale + tiepoint or a ModelTransformation matrix).

// Each test crate that includes this file uses only some of the writers.
#![allow(dead_code)]

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use tiff::encoder::{TiffEncoder, colortype};
use tiff::tags::Tag;

/// Layout and georeferencing of a synthetic u8 GeoTIFF.
pub struct U8GeoTiff<'a> {
    /// Columns.
    pub width: u32,
    /// Rows.
    pub height: u32,
    /// x of the upper-left corner.
    pub x0: f64,
    /// y of the upper-left corner.
    pub y0: f64,
    /// Square cell size in CRS units.
    pub cell: f64,
    /// EPSG code, written as the geographic (2048) or projected (3072) key.
    pub epsg: u16,
    /// Write the code as a geographic system.
    pub geographic: bool,
    /// GDAL nodata text.
    pub nodata: &'a str,
    /// Write this 4 × 4 ModelTransformation (row-major) instead of scale + tiepoint.
    pub matrix: Option<[f64; 16]>,
    /// Declare PixelIsPoint (GTRasterType 2) instead of PixelIsArea.
    pub pixel_is_point: bool,
}

/// Write `data` (row-major, `width × height`) to `path`.
pub fn write_u8_geotiff(path: &Path, spec: &U8GeoTiff<'_>, data: &[u8]) -> tiff::TiffResult<()> {
    let file = BufWriter::new(File::create(path)?);
    let mut enc = TiffEncoder::new(file)?;
    let mut image = enc.new_image::<colortype::Gray8>(spec.width, spec.height)?;
    image.rows_per_strip(64)?;
    let geographic = spec.geographic;
    // GeoKeyDirectory: version 1.1.0, 3 keys: model type, raster type,
    // and the geographic (2048) or projected (3072) EPSG code.
    #[rustfmt::skip]
    let keys: [u16; 16] = [
        1, 1, 0, 3,
        1024, 0, 1, if geographic { 2 } else { 1 },
        1025, 0, 1, if spec.pixel_is_point { 2 } else { 1 },
        if geographic { 2048 } else { 3072 }, 0, 1, spec.epsg,
    ];
    let dir = image.encoder();
    match &spec.matrix {
        Some(m) => dir.write_tag(Tag::ModelTransformationTag, &m[..])?,
        None => {
            dir.write_tag(Tag::ModelPixelScaleTag, &[spec.cell, spec.cell, 0.0][..])?;
            let tie = [0.0, 0.0, 0.0, spec.x0, spec.y0, 0.0];
            dir.write_tag(Tag::ModelTiepointTag, &tie[..])?;
        }
    }
    dir.write_tag(Tag::GeoKeyDirectoryTag, &keys[..])?;
    dir.write_tag(Tag::GdalNodata, spec.nodata)?;
    image.write_data(data)
}

/// Write `data` (row-major, `width × height`) as a one-band f32 GeoTIFF with the
/// georeferencing of `spec` (its `nodata` text is written as GDAL's nodata tag).
pub fn write_f32_geotiff(path: &Path, spec: &U8GeoTiff<'_>, data: &[f32]) -> tiff::TiffResult<()> {
    let file = BufWriter::new(File::create(path)?);
    let mut enc = TiffEncoder::new(file)?;
    let mut image = enc.new_image::<colortype::Gray32Float>(spec.width, spec.height)?;
    image.rows_per_strip(64)?;
    let geographic = spec.geographic;
    #[rustfmt::skip]
    let keys: [u16; 16] = [
        1, 1, 0, 3,
        1024, 0, 1, if geographic { 2 } else { 1 },
        1025, 0, 1, if spec.pixel_is_point { 2 } else { 1 },
        if geographic { 2048 } else { 3072 }, 0, 1, spec.epsg,
    ];
    let dir = image.encoder();
    dir.write_tag(Tag::ModelPixelScaleTag, &[spec.cell, spec.cell, 0.0][..])?;
    let tie = [0.0, 0.0, 0.0, spec.x0, spec.y0, 0.0];
    dir.write_tag(Tag::ModelTiepointTag, &tie[..])?;
    dir.write_tag(Tag::GeoKeyDirectoryTag, &keys[..])?;
    dir.write_tag(Tag::GdalNodata, spec.nodata)?;
    image.write_data(data)
}
