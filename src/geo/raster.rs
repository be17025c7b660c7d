//! Single-band GeoTIFF rasters held in memory, with their georeferencing.
//!
//! [`Raster::read`] decodes the image with the pure-Rust `tiff` crate and reads the
//! georeferencing itself: the affine transform from ModelPixelScale + ModelTiepoint
//! or from ModelTransformation (rotation terms rejected), the coordinate system from
//! the GeoKeyDirectory (GTModelType 1024, GTRasterType 1025, GeographicType 2048,
//! ProjectedCSType 3072), and the nodata value from GDAL's ASCII tag 42113. A
//! PixelIsPoint raster (GTRasterType = 2) has its tiepoint on a pixel centre and is
//! shifted by half a pixel so that, everywhere in this module, the transform maps
//! pixel *corners*: cell (col, row) covers [x0 + col·dx, x0 + (col+1)·dx) in x and
//! likewise in y (dy is negative for north-up images), and its centre is at
//! (col + ½, row + ½) in pixel units. Samples keep their stored type (u8, u16, i16,
//! i32, f32, f64) so a 10 000 × 10 000 class raster takes 100 MB. Supported
//! coordinate systems: EPSG:4326 (geographic; x = longitude, y = latitude), WGS84 UTM
//! EPSG:326xx/327xx and EPSG:3035; anything else is refused with the file named.
//! Geographic rasters must use longitudes in [−180, 180]: one stored in 0…360 or
//! crossing the antimeridian simply has no data for the other side.
//!
//! Tiled LZW rasters that `tiff` 0.11 refuses with "no lzw end code found" (GDAL
//! writes tiles whose LZW stream ends without the end-of-information code) are
//! decoded here chunk by chunk with `weezl`, the same LZW decoder, stopping when the
//! chunk is full instead of demanding the end code.

use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use rayon::prelude::*;
use thiserror::Error;
use tiff::ColorType;
use tiff::decoder::{Decoder, DecodingResult, Limits};
use tiff::tags::Tag;

use super::proj::{ProjError, Projection};

/// Errors from reading or building a raster. Each names the file.
#[derive(Debug, Error)]
pub enum RasterError {
    /// The file could not be opened or read.
    #[error("cannot read raster {path}: {source}")]
    Io {
        /// File.
        path: PathBuf,
        /// Underlying error.
        source: std::io::Error,
    },
    /// The TIFF structure or compression could not be decoded.
    #[error(
        "cannot decode GeoTIFF {path}: {detail}; re-save it as a single-band GeoTIFF (uncompressed, deflate or LZW)"
    )]
    Decode {
        /// File.
        path: PathBuf,
        /// What failed.
        detail: String,
    },
    /// The image is not a single band of a supported sample type.
    #[error(
        "raster {path}: {detail}; covariate rasters must have one band of 8/16/32-bit integers or 32/64-bit floats"
    )]
    Layout {
        /// File.
        path: PathBuf,
        /// What was found.
        detail: String,
    },
    /// No georeferencing tags.
    #[error(
        "raster {path} has no georeferencing (neither ModelPixelScale + ModelTiepoint nor ModelTransformation tags); export it as a GeoTIFF with its coordinate system"
    )]
    NotGeoreferenced {
        /// File.
        path: PathBuf,
    },
    /// Rotated/sheared grids or tie-point-only (GCP) georeferencing.
    #[error("raster {path}: {detail}; warp it to a north-up grid first")]
    Transform {
        /// File.
        path: PathBuf,
        /// What was found.
        detail: String,
    },
    /// A coordinate system we do not handle.
    #[error(
        "raster {path} uses coordinate system {crs}, which is not supported; supported: EPSG:4326, WGS84 UTM EPSG:32601-32660 / EPSG:32701-32760, EPSG:3035. Reproject the raster to one of these"
    )]
    UnsupportedCrs {
        /// File.
        path: PathBuf,
        /// Description of the CRS found.
        crs: String,
    },
    /// Parts given to [`Raster::from_parts`] do not fit together.
    #[error("raster {path}: {detail}")]
    Parts {
        /// Label given.
        path: PathBuf,
        /// What is inconsistent.
        detail: String,
    },
}

/// Pixel values in their stored type, row-major from the top-left cell.
#[derive(Debug, Clone, PartialEq)]
pub enum RasterData {
    /// Unsigned 8-bit.
    U8(Vec<u8>),
    /// Unsigned 16-bit.
    U16(Vec<u16>),
    /// Signed 16-bit.
    I16(Vec<i16>),
    /// Signed 32-bit.
    I32(Vec<i32>),
    /// 32-bit float.
    F32(Vec<f32>),
    /// 64-bit float.
    F64(Vec<f64>),
}

impl RasterData {
    /// Number of samples.
    pub fn len(&self) -> usize {
        match self {
            RasterData::U8(v) => v.len(),
            RasterData::U16(v) => v.len(),
            RasterData::I16(v) => v.len(),
            RasterData::I32(v) => v.len(),
            RasterData::F32(v) => v.len(),
            RasterData::F64(v) => v.len(),
        }
    }

    /// True when there are no samples.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Sample `i` as f64 (exact for every stored type).
    #[inline]
    pub fn get_f64(&self, i: usize) -> f64 {
        match self {
            RasterData::U8(v) => f64::from(v[i]),
            RasterData::U16(v) => f64::from(v[i]),
            RasterData::I16(v) => f64::from(v[i]),
            RasterData::I32(v) => f64::from(v[i]),
            RasterData::F32(v) => f64::from(v[i]),
            RasterData::F64(v) => v[i],
        }
    }

    /// True for the floating-point variants.
    pub fn is_float(&self) -> bool {
        matches!(self, RasterData::F32(_) | RasterData::F64(_))
    }
}

/// Coordinate system of a raster.
#[derive(Debug, Clone)]
pub enum RasterCrs {
    /// EPSG:4326: x is longitude, y latitude, in degrees.
    Geographic,
    /// A projected system in metres.
    Projected(Projection),
}

impl RasterCrs {
    /// EPSG code.
    pub fn epsg(&self) -> u32 {
        match self {
            RasterCrs::Geographic => 4326,
            RasterCrs::Projected(p) => p.epsg().unwrap_or(0),
        }
    }

    /// Longitude/latitude (degrees) to this system's x/y.
    ///
    /// # Errors
    /// [`ProjError`] for an invalid or unprojectable position.
    pub fn from_lonlat(&self, lon: f64, lat: f64) -> Result<(f64, f64), ProjError> {
        match self {
            RasterCrs::Geographic => {
                if lon.is_finite() && lat.is_finite() && lon.abs() <= 180.0 && lat.abs() <= 90.0 {
                    Ok((lon, lat))
                } else {
                    Err(ProjError::Coordinate { lon, lat })
                }
            }
            RasterCrs::Projected(p) => p.forward(lon, lat),
        }
    }

    /// [`RasterCrs::from_lonlat`] for many positions (rayon), as x and y columns with
    /// NaN where a position is invalid or cannot be projected. Project once and reuse
    /// the columns for every raster in the same system.
    ///
    /// # Panics
    /// When `lons` and `lats` differ in length.
    pub fn from_lonlat_many(&self, lons: &[f64], lats: &[f64]) -> (Vec<f64>, Vec<f64>) {
        assert_eq!(lons.len(), lats.len(), "one latitude per longitude");
        lons.par_iter()
            .zip(lats.par_iter())
            .map(|(&lon, &lat)| self.from_lonlat(lon, lat).unwrap_or((f64::NAN, f64::NAN)))
            .unzip()
    }
}

/// North-up affine transform, corner convention: x = x0 + u·dx, y = y0 + v·dy for
/// continuous pixel coordinates (u, v); cell (col, row) spans u ∈ [col, col+1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GeoTransform {
    /// x of the outer corner of the first column.
    pub x0: f64,
    /// y of the outer corner of the first row.
    pub y0: f64,
    /// Cell width in x units (non-zero).
    pub dx: f64,
    /// Cell height in y units (negative for north-up rasters).
    pub dy: f64,
}

impl GeoTransform {
    /// Continuous pixel coordinates (u, v) of a point; cell centres are at integer + ½.
    #[inline]
    pub fn to_pixel(&self, x: f64, y: f64) -> (f64, f64) {
        ((x - self.x0) / self.dx, (y - self.y0) / self.dy)
    }

    /// World coordinates of continuous pixel coordinates.
    #[inline]
    pub fn to_world(&self, u: f64, v: f64) -> (f64, f64) {
        (self.x0 + u * self.dx, self.y0 + v * self.dy)
    }
}

/// A single-band georeferenced raster in memory.
#[derive(Clone)]
pub struct Raster {
    path: PathBuf,
    width: usize,
    height: usize,
    transform: GeoTransform,
    crs: RasterCrs,
    nodata: Option<f64>,
    data: RasterData,
}

impl RasterData {
    fn type_name(&self) -> &'static str {
        match self {
            RasterData::U8(_) => "u8",
            RasterData::U16(_) => "u16",
            RasterData::I16(_) => "i16",
            RasterData::I32(_) => "i32",
            RasterData::F32(_) => "f32",
            RasterData::F64(_) => "f64",
        }
    }
}

// By hand: the derived form would print every sample of a 10^8-cell raster.
impl std::fmt::Debug for Raster {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Raster")
            .field("path", &self.path)
            .field("width", &self.width)
            .field("height", &self.height)
            .field("transform", &self.transform)
            .field("crs", &self.crs)
            .field("nodata", &self.nodata)
            .field("samples", &self.data.type_name())
            .finish()
    }
}

const KEY_MODEL_TYPE: u16 = 1024;
const KEY_RASTER_TYPE: u16 = 1025;
const KEY_CITATION: u16 = 1026;
const KEY_GEOGRAPHIC_TYPE: u16 = 2048;
const KEY_PROJECTED_TYPE: u16 = 3072;
const KEY_PCS_CITATION: u16 = 3073;
const RASTER_PIXEL_IS_POINT: u16 = 2;
const USER_DEFINED: u16 = 32767;

#[derive(Debug, Default)]
struct GeoKeys {
    model_type: Option<u16>,
    raster_type: Option<u16>,
    geographic: Option<u16>,
    projected: Option<u16>,
    citation: Option<String>,
}

fn parse_geokeys(dir: &[u16], ascii: Option<&str>) -> GeoKeys {
    let mut keys = GeoKeys::default();
    let n = dir.get(3).copied().unwrap_or(0) as usize;
    for k in 0..n {
        let Some(e) = dir.get(4 + 4 * k..8 + 4 * k) else {
            break;
        };
        let (id, location, count, value) = (e[0], e[1], e[2] as usize, e[3]);
        let short = if location == 0 { Some(value) } else { None };
        match id {
            KEY_MODEL_TYPE => keys.model_type = short,
            KEY_RASTER_TYPE => keys.raster_type = short,
            KEY_GEOGRAPHIC_TYPE => keys.geographic = short,
            KEY_PROJECTED_TYPE => keys.projected = short,
            KEY_CITATION | KEY_PCS_CITATION if location == Tag::GeoAsciiParamsTag.to_u16() => {
                let start = value as usize;
                if let Some(s) = ascii.and_then(|a| a.get(start..start + count)) {
                    let s = s.trim_end_matches(['|', '\0']).to_string();
                    if !s.is_empty() && keys.citation.is_none() {
                        keys.citation = Some(s);
                    }
                }
            }
            _ => {}
        }
    }
    keys
}

fn crs_from_keys(path: &Path, keys: &GeoKeys) -> Result<RasterCrs, RasterError> {
    let unsupported = |crs: String| RasterError::UnsupportedCrs {
        path: path.to_path_buf(),
        crs,
    };
    let named = |what: &str, code: u16| match &keys.citation {
        Some(c) => format!("{what} ({c})"),
        None if code == USER_DEFINED => format!("{what} (user-defined, no EPSG code)"),
        None => what.to_string(),
    };
    let model = keys.model_type.or(if keys.projected.is_some() {
        Some(1)
    } else if keys.geographic.is_some() {
        Some(2)
    } else {
        None
    });
    match model {
        Some(1) => match keys.projected {
            Some(code) => Projection::from_epsg(u32::from(code))
                .map(RasterCrs::Projected)
                .map_err(|_| unsupported(named(&format!("EPSG:{code}"), code))),
            None => Err(unsupported(named(
                "a projected system without EPSG code",
                USER_DEFINED,
            ))),
        },
        Some(2) => match keys.geographic {
            Some(4326) => Ok(RasterCrs::Geographic),
            Some(code) => Err(unsupported(named(&format!("EPSG:{code}"), code))),
            None => Err(unsupported(named(
                "a geographic system without EPSG code",
                USER_DEFINED,
            ))),
        },
        Some(other) => Err(unsupported(format!(
            "GTModelType {other} (geocentric or unknown)"
        ))),
        None => Err(unsupported(
            "none declared (no GeoKeyDirectory model type)".to_string(),
        )),
    }
}

fn transform_from_tags(
    path: &Path,
    scale: Option<Vec<f64>>,
    tiepoints: Option<Vec<f64>>,
    matrix: Option<Vec<f64>>,
    pixel_is_point: bool,
) -> Result<GeoTransform, RasterError> {
    let bad = |detail: String| RasterError::Transform {
        path: path.to_path_buf(),
        detail,
    };
    // Under PixelIsPoint the raster coordinate (I, J) names the centre of pixel (I, J),
    // i.e. corner coordinate (I + ½, J + ½) (OGC GeoTIFF 1.1, OGC 19-008r4, GTRasterTypeGeoKey).
    let half = if pixel_is_point { 0.5 } else { 0.0 };
    let t = match (scale, tiepoints, matrix) {
        (Some(s), Some(tp), _) if s.len() >= 2 && tp.len() >= 6 => {
            if tp.len() > 6 {
                return Err(bad(format!(
                    "{} tie points without a single affine transform (ground control points)",
                    tp.len() / 6
                )));
            }
            let (i, j, x, y) = (tp[0], tp[1], tp[3], tp[4]);
            let (dx, dy) = (s[0], -s[1]);
            GeoTransform {
                x0: x - (i + half) * dx,
                y0: y - (j + half) * dy,
                dx,
                dy,
            }
        }
        (_, _, Some(m)) if m.len() >= 8 => {
            if m[1] != 0.0 || m[4] != 0.0 {
                return Err(bad(format!(
                    "rotated or sheared grid (ModelTransformation terms {} and {})",
                    m[1], m[4]
                )));
            }
            GeoTransform {
                x0: m[3] - half * m[0],
                y0: m[7] - half * m[5],
                dx: m[0],
                dy: m[5],
            }
        }
        (_, Some(tp), None) if tp.len() > 6 => {
            return Err(bad(
                "ground control points only, no affine transform".to_string()
            ));
        }
        _ => {
            return Err(RasterError::NotGeoreferenced {
                path: path.to_path_buf(),
            });
        }
    };
    let ok = [t.x0, t.y0, t.dx, t.dy].iter().all(|v| v.is_finite()) && t.dx != 0.0 && t.dy != 0.0;
    if ok {
        Ok(t)
    } else {
        Err(bad(format!("degenerate transform {t:?}")))
    }
}

fn parse_nodata(text: &str) -> Option<f64> {
    let t = text.trim().trim_end_matches('\0').trim();
    match t.to_ascii_lowercase().as_str() {
        "nan" | "-nan" => Some(f64::NAN),
        _ => t.parse::<f64>().ok(),
    }
}

impl Raster {
    /// Read a single-band GeoTIFF.
    ///
    /// # Errors
    /// [`RasterError`] naming the file: unreadable, undecodable, more than one band
    /// or an unsupported sample type, no georeferencing, rotated grid, or a
    /// coordinate system other than EPSG:4326, UTM WGS84 or EPSG:3035.
    pub fn read(path: impl AsRef<Path>) -> Result<Raster, RasterError> {
        let path = path.as_ref();
        let io = |source| RasterError::Io {
            path: path.to_path_buf(),
            source,
        };
        let decode = |e: tiff::TiffError| RasterError::Decode {
            path: path.to_path_buf(),
            detail: e.to_string(),
        };
        let file = File::open(path).map_err(io)?;
        let mut dec = Decoder::new(BufReader::new(file))
            .map_err(decode)?
            .with_limits(Limits::unlimited());
        let (w, h) = dec.dimensions().map_err(decode)?;
        let (width, height) = (w as usize, h as usize);
        // Checked directly: with planar (band-interleaved) storage the decoder would
        // otherwise hand back the first band alone.
        let samples = dec
            .find_tag_unsigned::<u16>(Tag::SamplesPerPixel)
            .map_err(decode)?
            .unwrap_or(1);
        if samples != 1 {
            return Err(RasterError::Layout {
                path: path.to_path_buf(),
                detail: format!("image has {samples} bands"),
            });
        }
        match dec.colortype().map_err(decode)? {
            ColorType::Gray(_) => {}
            other => {
                return Err(RasterError::Layout {
                    path: path.to_path_buf(),
                    detail: format!("image has colour type {other:?}, not a single band"),
                });
            }
        }
        let f64s = |dec: &mut Decoder<_>, tag| -> Result<Option<Vec<f64>>, RasterError> {
            match dec.find_tag(tag).map_err(decode)? {
                Some(v) => Ok(Some(v.into_f64_vec().map_err(decode)?)),
                None => Ok(None),
            }
        };
        let scale = f64s(&mut dec, Tag::ModelPixelScaleTag)?;
        let tiepoints = f64s(&mut dec, Tag::ModelTiepointTag)?;
        let matrix = f64s(&mut dec, Tag::ModelTransformationTag)?;
        let keydir = match dec.find_tag(Tag::GeoKeyDirectoryTag).map_err(decode)? {
            Some(v) => Some(v.into_u16_vec().map_err(decode)?),
            None => None,
        };
        let ascii = match dec.find_tag(Tag::GeoAsciiParamsTag).map_err(decode)? {
            Some(v) => v.into_string().ok(),
            None => None,
        };
        let nodata = match dec.find_tag(Tag::GdalNodata).map_err(decode)? {
            Some(v) => v.into_string().ok().as_deref().and_then(parse_nodata),
            None => None,
        };
        if scale.is_none() && tiepoints.is_none() && matrix.is_none() {
            return Err(RasterError::NotGeoreferenced {
                path: path.to_path_buf(),
            });
        }
        let keys = keydir
            .as_deref()
            .map(|d| parse_geokeys(d, ascii.as_deref()))
            .unwrap_or_default();
        let pixel_is_point = keys.raster_type == Some(RASTER_PIXEL_IS_POINT);
        let transform = transform_from_tags(path, scale, tiepoints, matrix, pixel_is_point)?;
        let crs = crs_from_keys(path, &keys)?;

        let image = match dec.read_image() {
            Ok(img) => img,
            Err(e) if e.to_string().contains("no lzw end code") => {
                read_lzw_chunks(path, &mut dec, width, height)?
            }
            Err(e) => return Err(decode(e)),
        };
        let layout = |detail: String| RasterError::Layout {
            path: path.to_path_buf(),
            detail,
        };
        let data = match image {
            DecodingResult::U8(v) => RasterData::U8(v),
            DecodingResult::U16(v) => RasterData::U16(v),
            DecodingResult::I8(v) => RasterData::I16(v.into_iter().map(i16::from).collect()),
            DecodingResult::I16(v) => RasterData::I16(v),
            DecodingResult::I32(v) => RasterData::I32(v),
            DecodingResult::U32(v) => RasterData::I32(
                v.into_iter()
                    .map(i32::try_from)
                    .collect::<Result<_, _>>()
                    .map_err(|_| layout("u32 samples above 2^31 - 1".to_string()))?,
            ),
            DecodingResult::F32(v) => RasterData::F32(v),
            DecodingResult::F64(v) => RasterData::F64(v),
            _ => {
                return Err(layout(
                    "unsupported sample type (64-bit integer or 16-bit float)".into(),
                ));
            }
        };
        Raster::from_parts(path, width, height, transform, crs, nodata, data)
    }

    /// Build a raster from parts (for rasters made in memory); `label` stands in for
    /// the file name in messages.
    ///
    /// # Errors
    /// [`RasterError::Parts`] when the sample count is not `width × height`, a size is
    /// zero, or the transform is degenerate.
    pub fn from_parts(
        label: impl AsRef<Path>,
        width: usize,
        height: usize,
        transform: GeoTransform,
        crs: RasterCrs,
        nodata: Option<f64>,
        data: RasterData,
    ) -> Result<Raster, RasterError> {
        let path = label.as_ref().to_path_buf();
        let fail = |detail: String| RasterError::Parts {
            path: path.clone(),
            detail,
        };
        if width == 0 || height == 0 || width.checked_mul(height) != Some(data.len()) {
            return Err(fail(format!(
                "{} samples do not fill {width} x {height} cells",
                data.len()
            )));
        }
        let t = transform;
        if !([t.x0, t.y0, t.dx, t.dy].iter().all(|v| v.is_finite()) && t.dx != 0.0 && t.dy != 0.0) {
            return Err(fail(format!("degenerate transform {t:?}")));
        }
        // GDAL compares nodata in the band's own type: a decimal nodata such as 0.1
        // must match the f32 sample nearest to it, not the f64 0.1.
        let nodata = match (&data, nodata) {
            (RasterData::F32(_), Some(v)) => Some(f64::from(v as f32)),
            (_, v) => v,
        };
        Ok(Raster {
            path,
            width,
            height,
            transform,
            crs,
            nodata,
            data,
        })
    }

    /// File the raster came from (or the label given to [`Raster::from_parts`]).
    pub fn path(&self) -> &Path {
        &self.path
    }
    /// Number of columns.
    pub fn width(&self) -> usize {
        self.width
    }
    /// Number of rows.
    pub fn height(&self) -> usize {
        self.height
    }
    /// Corner-convention affine transform.
    pub fn transform(&self) -> &GeoTransform {
        &self.transform
    }
    /// Coordinate system.
    pub fn crs(&self) -> &RasterCrs {
        &self.crs
    }
    /// Declared nodata value (GDAL tag 42113) in the samples' type (f32 nodata rounded
    /// to f32), if any. NaN samples are always nodata.
    pub fn nodata(&self) -> Option<f64> {
        self.nodata
    }
    /// The samples.
    pub fn data(&self) -> &RasterData {
        &self.data
    }

    /// True when sample `i` (row-major) is nodata: equal to the declared nodata
    /// value, or NaN.
    #[inline]
    pub fn is_nodata_index(&self, i: usize) -> bool {
        let v = self.data.get_f64(i);
        v.is_nan() || self.nodata.is_some_and(|nd| v == nd)
    }

    /// Value of cell (col, row), `None` when it is nodata.
    ///
    /// # Panics
    /// When the cell is outside the raster.
    #[inline]
    pub fn cell_value(&self, col: usize, row: usize) -> Option<f64> {
        assert!(col < self.width && row < self.height, "cell outside raster");
        let i = row * self.width + col;
        if self.is_nodata_index(i) {
            None
        } else {
            Some(self.data.get_f64(i))
        }
    }

    /// The cell containing (x, y) in the raster's coordinates, `None` outside. A point
    /// on the boundary between cells belongs to the cell with the larger index.
    pub fn cell_at(&self, x: f64, y: f64) -> Option<(usize, usize)> {
        let (u, v) = self.transform.to_pixel(x, y);
        if u >= 0.0 && v >= 0.0 && u < self.width as f64 && v < self.height as f64 {
            Some((u as usize, v as usize))
        } else {
            None
        }
    }

    /// World coordinates of the centre of cell (col, row).
    pub fn cell_centre(&self, col: usize, row: usize) -> (f64, f64) {
        self.transform.to_world(col as f64 + 0.5, row as f64 + 0.5)
    }
}

/// Decode an LZW image chunk by chunk, tolerating a missing end-of-information code.
fn read_lzw_chunks<R: Read + Seek>(
    path: &Path,
    dec: &mut Decoder<R>,
    width: usize,
    height: usize,
) -> Result<DecodingResult, RasterError> {
    let fail = |detail: String| RasterError::Decode {
        path: path.to_path_buf(),
        detail,
    };
    let tiff_err = |e: tiff::TiffError| fail(e.to_string());
    let bits = dec
        .find_tag_unsigned::<u16>(Tag::BitsPerSample)
        .map_err(tiff_err)?
        .unwrap_or(1);
    let format = dec
        .find_tag_unsigned::<u16>(Tag::SampleFormat)
        .map_err(tiff_err)?
        .unwrap_or(1);
    let predictor = dec
        .find_tag_unsigned::<u16>(Tag::Predictor)
        .map_err(tiff_err)?
        .unwrap_or(1);
    if bits != 8 || predictor > 2 {
        return Err(fail(format!(
            "LZW stream without end code in a {bits}-bit raster with predictor {predictor}; re-save the raster with deflate compression"
        )));
    }
    let tiled = dec.find_tag(Tag::TileOffsets).map_err(tiff_err)?.is_some();
    let (offsets_tag, counts_tag) = if tiled {
        (Tag::TileOffsets, Tag::TileByteCounts)
    } else {
        (Tag::StripOffsets, Tag::StripByteCounts)
    };
    let offsets = dec.get_tag_u64_vec(offsets_tag).map_err(tiff_err)?;
    let counts = dec.get_tag_u64_vec(counts_tag).map_err(tiff_err)?;
    let (cw, ch) = if tiled {
        (
            dec.get_tag_u32(Tag::TileWidth).map_err(tiff_err)? as usize,
            dec.get_tag_u32(Tag::TileLength).map_err(tiff_err)? as usize,
        )
    } else {
        let rows = dec
            .find_tag_unsigned::<u32>(Tag::RowsPerStrip)
            .map_err(tiff_err)?
            .map_or(height, |r| (r as usize).min(height));
        (width, rows)
    };
    let across = width.div_ceil(cw);
    let down = height.div_ceil(ch);
    if offsets.len() < across * down || counts.len() < across * down {
        return Err(fail("fewer chunk offsets than chunks".to_string()));
    }
    let mut out = vec![0u8; width * height];
    let mut raw = Vec::new();
    let mut chunk = vec![0u8; cw * ch];
    for k in 0..across * down {
        raw.resize(counts[k] as usize, 0);
        let reader = dec.inner();
        reader
            .seek(SeekFrom::Start(offsets[k]))
            .and_then(|_| reader.read_exact(&mut raw))
            .map_err(|e| fail(format!("chunk {k}: {e}")))?;
        chunk.fill(0);
        let mut lzw = weezl::decode::Decoder::with_tiff_size_switch(weezl::BitOrder::Msb, 8);
        let mut filled = 0;
        let mut input = &raw[..];
        while filled < chunk.len() {
            let r = lzw.decode_bytes(input, &mut chunk[filled..]);
            input = &input[r.consumed_in..];
            filled += r.consumed_out;
            match r.status {
                Ok(weezl::LzwStatus::Ok) => {}
                Ok(weezl::LzwStatus::Done) | Ok(weezl::LzwStatus::NoProgress) => break,
                Err(e) => return Err(fail(format!("chunk {k}: {e}"))),
            }
        }
        if filled < chunk.len() {
            return Err(fail(format!(
                "chunk {k} decoded to {filled} of {} bytes",
                chunk.len()
            )));
        }
        if predictor == 2 {
            for row in chunk.chunks_mut(cw) {
                for i in 1..row.len() {
                    row[i] = row[i].wrapping_add(row[i - 1]);
                }
            }
        }
        let (c0, r0) = ((k % across) * cw, (k / across) * ch);
        for r in 0..ch.min(height - r0) {
            let n = cw.min(width - c0);
            let dst = (r0 + r) * width + c0;
            out[dst..dst + n].copy_from_slice(&chunk[r * cw..r * cw + n]);
        }
    }
    Ok(match format {
        2 => DecodingResult::I8(out.into_iter().map(|b| b as i8).collect()),
        _ => DecodingResult::U8(out),
    })
}
