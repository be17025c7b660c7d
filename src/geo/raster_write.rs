//! Writing single-band GeoTIFFs (u8 class codes or f32 values) that [`super::raster`]
//! reads back: strips of 64 rows, optionally deflate-compressed, georeferenced by
//! ModelPixelScale + ModelTiepoint (north-up, square cells) or by a 4 × 4
//! ModelTransformation, a three-key GeoKeyDirectory (GTModelType 1024, GTRasterType 1025,
//! and the EPSG code as GeographicType 2048 or ProjectedCSType 3072) and GDAL's ASCII
//! nodata tag 42113.
//!
//! The encoder writes to any `Write + Seek`, so callers choose the destination: a plain
//! file in tests, or the temporary file of [`crate::io::write_atomic`] for outputs.
//! The bytes depend only on the inputs (no timestamps or software tags), so the same
//! grid always gives the same file.

use std::io::{Seek, Write};

use tiff::encoder::{DeflateLevel, TiffEncoder, TiffKindStandard, colortype};
use tiff::tags::Tag;

/// Layout and georeferencing of a one-band GeoTIFF.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GeoTiffLayout<'a> {
    /// Columns.
    pub width: u32,
    /// Rows.
    pub height: u32,
    /// x of the upper-left corner of the upper-left cell.
    pub x0: f64,
    /// y of the upper-left corner of the upper-left cell.
    pub y0: f64,
    /// Square cell size in CRS units.
    pub cell: f64,
    /// EPSG code, written as the geographic (2048) or projected (3072) key.
    pub epsg: u16,
    /// Write the code as a geographic system.
    pub geographic: bool,
    /// GDAL nodata text (e.g. "255", "-9999").
    pub nodata: &'a str,
    /// Write this 4 × 4 ModelTransformation (row-major) instead of scale + tiepoint.
    pub matrix: Option<[f64; 16]>,
    /// Declare PixelIsPoint (GTRasterType 2) instead of PixelIsArea.
    pub pixel_is_point: bool,
}

/// Compression of the image strips.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Compression {
    /// Stored as they are.
    #[default]
    None,
    /// Deflate (zlib), level 6.
    Deflate,
}

/// Why a GeoTIFF could not be written.
#[derive(Debug, thiserror::Error)]
pub enum GeoTiffWriteError {
    /// `data` does not hold `width × height` samples.
    #[error("{samples} samples do not fill {width} x {height} cells")]
    Size {
        /// Samples given.
        samples: usize,
        /// Columns of the layout.
        width: u32,
        /// Rows of the layout.
        height: u32,
    },
    /// The encoder or the writer failed.
    #[error("cannot encode GeoTIFF: {0}")]
    Encode(#[from] tiff::TiffError),
}

/// GeoKeyDirectory: version 1.1.0 with three keys: model type, raster type, and the
/// geographic (2048) or projected (3072) EPSG code.
fn geokeys(layout: &GeoTiffLayout<'_>) -> [u16; 16] {
    let g = layout.geographic;
    #[rustfmt::skip]
    let keys = [
        1, 1, 0, 3,
        1024, 0, 1, if g { 2 } else { 1 },
        1025, 0, 1, if layout.pixel_is_point { 2 } else { 1 },
        if g { 2048 } else { 3072 }, 0, 1, layout.epsg,
    ];
    keys
}

fn encoder<W: Write + Seek>(
    w: W,
    compression: Compression,
) -> Result<TiffEncoder<W, TiffKindStandard>, GeoTiffWriteError> {
    let enc = TiffEncoder::new(w)?;
    Ok(match compression {
        Compression::None => enc,
        Compression::Deflate => {
            enc.with_compression(tiff::encoder::Compression::Deflate(DeflateLevel::Balanced))
        }
    })
}

fn check_size(layout: &GeoTiffLayout<'_>, samples: usize) -> Result<(), GeoTiffWriteError> {
    if (layout.width as usize).checked_mul(layout.height as usize) == Some(samples) {
        Ok(())
    } else {
        Err(GeoTiffWriteError::Size {
            samples,
            width: layout.width,
            height: layout.height,
        })
    }
}

/// Writes one image of colour type `C` with the georeferencing tags of `layout`.
fn write_image<W, C>(
    w: W,
    layout: &GeoTiffLayout<'_>,
    data: &[C::Inner],
    compression: Compression,
) -> Result<(), GeoTiffWriteError>
where
    W: Write + Seek,
    C: colortype::ColorType,
    [C::Inner]: tiff::encoder::TiffValue,
{
    check_size(layout, data.len())?;
    let mut enc = encoder(w, compression)?;
    let mut image = enc.new_image::<C>(layout.width, layout.height)?;
    image.rows_per_strip(64)?;
    let dir = image.encoder();
    match &layout.matrix {
        Some(m) => dir.write_tag(Tag::ModelTransformationTag, &m[..])?,
        None => {
            dir.write_tag(
                Tag::ModelPixelScaleTag,
                &[layout.cell, layout.cell, 0.0][..],
            )?;
            let tie = [0.0, 0.0, 0.0, layout.x0, layout.y0, 0.0];
            dir.write_tag(Tag::ModelTiepointTag, &tie[..])?;
        }
    }
    dir.write_tag(Tag::GeoKeyDirectoryTag, &geokeys(layout)[..])?;
    dir.write_tag(Tag::GdalNodata, layout.nodata)?;
    image.write_data(data)?;
    Ok(())
}

/// Writes `data` (row-major from the upper-left cell, `width × height`) as a one-band
/// u8 GeoTIFF.
///
/// # Errors
/// [`GeoTiffWriteError`] when `data` does not fill the layout or encoding/writing fails.
///
/// # Examples
/// ```
/// use cairn::geo::raster::Raster;
/// use cairn::geo::raster_write::{Compression, GeoTiffLayout, write_u8};
/// let layout = GeoTiffLayout {
///     width: 2, height: 1, x0: 500_000.0, y0: 7_800_000.0, cell: 25.0, epsg: 32634,
///     geographic: false, nodata: "255", matrix: None, pixel_is_point: false,
/// };
/// let path = std::env::temp_dir().join(format!("cairn-doc-{}.tif", std::process::id()));
/// write_u8(std::fs::File::create(&path)?, &layout, &[1, 255], Compression::Deflate)?;
/// let r = Raster::read(&path)?;
/// assert_eq!((r.cell_value(0, 0), r.cell_value(1, 0), r.crs().epsg()), (Some(1.0), None, 32634));
/// # std::fs::remove_file(&path)?;
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn write_u8<W: Write + Seek>(
    w: W,
    layout: &GeoTiffLayout<'_>,
    data: &[u8],
    compression: Compression,
) -> Result<(), GeoTiffWriteError> {
    write_image::<W, colortype::Gray8>(w, layout, data, compression)
}

/// Writes `data` (row-major from the upper-left cell, `width × height`) as a one-band
/// 32-bit float GeoTIFF.
///
/// # Errors
/// [`GeoTiffWriteError`] when `data` does not fill the layout or encoding/writing fails.
pub fn write_f32<W: Write + Seek>(
    w: W,
    layout: &GeoTiffLayout<'_>,
    data: &[f32],
    compression: Compression,
) -> Result<(), GeoTiffWriteError> {
    write_image::<W, colortype::Gray32Float>(w, layout, data, compression)
}
