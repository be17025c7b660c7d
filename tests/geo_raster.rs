//! GeoTIFF reading and bilinear interpolation against rasterio-written fixtures.

use std::path::PathBuf;

use cairn::geo::interp::{Missing, bilinear, bilinear_lonlat};
use cairn::geo::raster::{Raster, RasterData, RasterError};

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/rasters")
        .join(name)
}

#[test]
fn reads_back_rasterio_values_transforms_and_nodata() {
    // Source: rasterio 1.4.4 / GDAL 3.10.3, tests/fixtures/rasters/expected.csv
    // (transform, nodata, and the cell and value rasterio's `index` finds for pixel
    // centres and points 1e-3 pixel inside each cell corner).
    let text = include_str!("fixtures/rasters/expected.csv");
    let mut current: Option<(String, Raster)> = None;
    let mut checked = 0;
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        if current.as_ref().map(|c| c.0.as_str()) != Some(f[0]) {
            let r = Raster::read(fixture(f[0])).unwrap_or_else(|e| panic!("{e}"));
            let num = |i: usize| f[i].parse::<f64>().unwrap();
            assert_eq!(
                (r.width(), r.height()),
                (num(1) as usize, num(2) as usize),
                "{}",
                f[0]
            );
            let t = r.transform();
            // The transform is stored exactly as decimal-exact doubles; 1e-9 covers
            // the half-pixel arithmetic of PixelIsPoint files.
            for (ours, theirs) in [
                (t.dx, num(3)),
                (t.x0, num(5)),
                (t.dy, num(7)),
                (t.y0, num(8)),
            ] {
                assert!((ours - theirs).abs() < 1e-9, "{}: {t:?}", f[0]);
            }
            assert_eq!((num(4), num(6)), (0.0, 0.0), "fixtures are north-up");
            match (r.nodata(), f[9]) {
                (None, "") => {}
                (Some(a), "nan") => assert!(a.is_nan()),
                (Some(a), b) => assert_eq!(a, b.parse::<f64>().unwrap(), "{}", f[0]),
                (a, b) => panic!("{}: nodata {a:?} vs {b}", f[0]),
            }
            current = Some((f[0].to_string(), r));
        }
        let r = &current.as_ref().unwrap().1;
        let (x, y): (f64, f64) = (f[10].parse().unwrap(), f[11].parse().unwrap());
        let (col, row): (usize, usize) = (f[12].parse().unwrap(), f[13].parse().unwrap());
        let value: f64 = f[14].parse().unwrap();
        assert_eq!(r.cell_at(x, y), Some((col, row)), "{line}");
        let is_nodata = value.is_nan() || r.nodata() == Some(value);
        match r.cell_value(col, row) {
            Some(v) => assert!(!is_nodata && v == value, "{line}: got {v}"),
            None => assert!(is_nodata, "{line}: got nodata"),
        }
        checked += 1;
    }
    assert!(checked > 2000);
}

#[test]
fn sample_types_and_coordinate_systems() {
    let cases = [
        ("geographic_u8.tif", 4326),
        ("utm33n_u16.tif", 32633),
        ("utm33s_i16_nodata.tif", 32733),
        ("laea3035_f32.tif", 3035),
        ("point_f64.tif", 4326),
        // Tiled LZW: tiff 0.11.3 alone fails ("no lzw end code found"); read via the fallback.
        ("tiled_lzw_u8.tif", 32633),
    ];
    for (name, epsg) in cases {
        let r = Raster::read(fixture(name)).unwrap();
        assert_eq!(r.crs().epsg(), epsg, "{name}");
    }
    let kinds = |name| match Raster::read(fixture(name)).unwrap().data() {
        RasterData::U8(_) => "u8",
        RasterData::U16(_) => "u16",
        RasterData::I16(_) => "i16",
        RasterData::I32(_) => "i32",
        RasterData::F32(_) => "f32",
        RasterData::F64(_) => "f64",
    };
    assert_eq!(kinds("utm33s_i16_nodata.tif"), "i16");
    assert_eq!(kinds("laea3035_f32.tif"), "f32");
    assert_eq!(kinds("point_f64.tif"), "f64");
}

#[test]
fn bilinear_matches_hand_computation() {
    // utm33n_u16.tif holds z(col, row) = ((7·row + 3·col) mod 11)·100 + 7 on 30 m cells
    // from (500000, 6650000). Point u = 1.75, v = 2.0 (s = 0.25, t = 0.5 between the
    // centres of cells (1,1), (2,1), (1,2), (2,2) = 1007, 207, 607, 907):
    // 0.375·1007 + 0.125·207 + 0.375·607 + 0.125·907 = 744.5.
    let r = Raster::read(fixture("utm33n_u16.tif")).unwrap();
    let v = bilinear(&r, 500_000.0 + 1.75 * 30.0, 6_650_000.0 - 2.0 * 30.0).unwrap();
    assert!((v - 744.5).abs() < 1e-9, "{v}");
    // At a cell centre the value is that cell's: (c=3, r=0) → (9 mod 11)·100 + 7 = 907.
    assert_eq!(
        bilinear(&r, 500_000.0 + 3.5 * 30.0, 6_650_000.0 - 0.5 * 30.0),
        Ok(907.0)
    );
    // Outer half-cell rim at the top-left corner: clamped to the corner centre (7).
    assert_eq!(
        bilinear(&r, 500_000.0 + 0.2 * 30.0, 6_650_000.0 - 0.1 * 30.0),
        Ok(7.0)
    );
    // Outside the extent: no value.
    assert_eq!(
        bilinear(&r, 499_999.0, 6_649_990.0),
        Err(Missing::OutsideRaster)
    );
    // The same point through longitude/latitude gives the same value.
    let p = cairn::geo::proj::Projection::utm(33, false).unwrap();
    let (lon, lat) = p.inverse(500_052.5, 6_649_940.0).unwrap();
    assert!((bilinear_lonlat(&r, lon, lat).unwrap() - 744.5).abs() < 1e-6);
}

#[test]
fn bilinear_respects_nodata() {
    // laea3035_f32.tif: z(col,row) = 0.5·(5·row + col) + 1.25 on 1 km cells from
    // (4321000, 3210000), with cell (col 3, row 2) NaN (the declared nodata).
    let r = Raster::read(fixture("laea3035_f32.tif")).unwrap();
    let at = |u: f64, v: f64| bilinear(&r, 4_321_000.0 + u * 1000.0, 3_210_000.0 - v * 1000.0);
    // Any blend touching the NaN cell has no value.
    assert_eq!(at(3.2, 2.6), Err(Missing::Nodata));
    assert_eq!(at(2.9, 1.9), Err(Missing::Nodata));
    // The neighbour's own centre needs no weight from it: z(2,2) = 0.5·12 + 1.25.
    assert_eq!(at(2.5, 2.5), Ok(7.25));
    // Between (0,0)=1.25, (1,0)=1.75, (0,1)=3.75, (1,1)=4.25 at s = t = 0.5: 2.75.
    assert_eq!(at(1.0, 1.0), Ok(2.75));
    // i16 raster with declared nodata −9999 at (col 2, row 1).
    let n = Raster::read(fixture("utm33s_i16_nodata.tif")).unwrap();
    assert_eq!(n.cell_value(2, 1), None);
    assert_eq!(
        bilinear(&n, 400_000.0 + 2.4 * 100.0, 8_000_000.0 - 1.6 * 100.0),
        Err(Missing::Nodata)
    );
}

#[test]
fn pixel_is_point_is_shifted_half_a_pixel() {
    // point_f64.tif: GDAL stored the tiepoint at the first pixel's centre
    // (−69.875, −30.125) with GTRasterType = PixelIsPoint; corners must come out at
    // (−70, −30) like rasterio reports.
    let r = Raster::read(fixture("point_f64.tif")).unwrap();
    let t = r.transform();
    assert!((t.x0 + 70.0).abs() < 1e-12 && (t.y0 + 30.0).abs() < 1e-12);
    assert_eq!(r.cell_centre(0, 0), (-69.875, -30.125));
}

#[test]
fn errors_name_the_file_and_the_crs() {
    let e = Raster::read(fixture("unsupported_3857.tif")).unwrap_err();
    assert!(matches!(e, RasterError::UnsupportedCrs { .. }));
    let msg = e.to_string();
    assert!(
        msg.contains("unsupported_3857.tif") && msg.contains("EPSG:3857"),
        "{msg}"
    );
    let e = Raster::read(fixture("no_georef.tif")).unwrap_err();
    assert!(matches!(e, RasterError::NotGeoreferenced { .. }));
    assert!(e.to_string().contains("no_georef.tif"));
    for name in ["two_band_pixel.tif", "two_band_band.tif"] {
        let e = Raster::read(fixture(name)).unwrap_err();
        assert!(matches!(e, RasterError::Layout { .. }), "{name}: {e}");
        assert!(
            e.to_string().contains(name) && e.to_string().contains("2 bands"),
            "{e}"
        );
    }
    let e = Raster::read(fixture("missing.tif")).unwrap_err();
    assert!(matches!(e, RasterError::Io { .. }) && e.to_string().contains("missing.tif"));
}

#[path = "support/geotiff_writer.rs"]
mod geotiff_writer;

#[test]
fn reads_a_ten_thousand_square_raster() {
    // 10 000 × 10 000 u8 cells (100 MB) written with the tiff encoder, read back whole.
    let (w, h) = (10_000u32, 10_000u32);
    let data: Vec<u8> = (0..w as usize * h as usize)
        .map(|i| ((i % 9973) % 7) as u8)
        .collect();
    let dir = std::env::temp_dir().join(format!("cairn-geo-test-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("big.tif");
    geotiff_writer::write_u8_geotiff(
        &path,
        &geotiff_writer::U8GeoTiff {
            width: w,
            height: h,
            x0: 300_000.0,
            y0: 7_000_000.0,
            cell: 30.0,
            epsg: 32733,
            geographic: false,
            nodata: "6",
            matrix: None,
            pixel_is_point: false,
        },
        &data,
    )
    .unwrap();
    let r = Raster::read(&path).unwrap();
    std::fs::remove_dir_all(&dir).unwrap();
    assert_eq!(
        (r.width(), r.height(), r.crs().epsg()),
        (10_000, 10_000, 32733)
    );
    for i in [0usize, 1, 12_345_678, 99_999_999] {
        let (col, row) = (i % 10_000, i / 10_000);
        let want = data[i];
        let got = r.cell_value(col, row);
        if want == 6 {
            assert_eq!(got, None);
        } else {
            assert_eq!(got, Some(f64::from(want)));
        }
    }
    assert!(matches!(r.data(), RasterData::U8(v) if v.len() == 100_000_000));
}

fn small_spec(
    epsg: u16,
    geographic: bool,
    matrix: Option<[f64; 16]>,
) -> geotiff_writer::U8GeoTiff<'static> {
    geotiff_writer::U8GeoTiff {
        width: 3,
        height: 2,
        x0: 10.0,
        y0: 50.0,
        cell: 0.5,
        epsg,
        geographic,
        nodata: "0",
        matrix,
        pixel_is_point: false,
    }
}

fn write_and_read(name: &str, spec: &geotiff_writer::U8GeoTiff<'_>) -> Result<Raster, RasterError> {
    let dir = std::env::temp_dir().join(format!("cairn-geo-test-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join(name);
    geotiff_writer::write_u8_geotiff(&path, spec, &[1, 2, 3, 4, 5, 0]).unwrap();
    let r = Raster::read(&path);
    std::fs::remove_dir_all(&dir).unwrap();
    r
}

#[test]
fn model_transformation_and_pixel_is_point() {
    // x = 0.5·I + 10, y = −0.25·J + 50 (OGC GeoTIFF 1.1, ModelTransformationTag).
    let m = [
        0.5, 0.0, 0.0, 10.0, 0.0, -0.25, 0.0, 50.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0,
    ];
    let r = write_and_read("matrix.tif", &small_spec(4326, true, Some(m))).unwrap();
    assert_eq!(
        *r.transform(),
        cairn::geo::raster::GeoTransform {
            x0: 10.0,
            y0: 50.0,
            dx: 0.5,
            dy: -0.25
        }
    );
    assert_eq!(r.cell_value(2, 1), None, "declared nodata 0");
    assert_eq!(r.cell_value(1, 1), Some(5.0));
    // Same matrix read as PixelIsPoint: (10, 50) is now the first cell's centre.
    let mut spec = small_spec(4326, true, Some(m));
    spec.pixel_is_point = true;
    let p = write_and_read("matrix_point.tif", &spec).unwrap();
    assert_eq!(p.cell_centre(0, 0), (10.0, 50.0));
    // Tiepoint + scale with PixelIsPoint: likewise.
    let mut spec = small_spec(32633, false, None);
    spec.pixel_is_point = true;
    let q = write_and_read("tie_point.tif", &spec).unwrap();
    assert_eq!(q.cell_centre(0, 0), (10.0, 50.0));
}

#[test]
fn rotated_grids_and_other_systems_are_refused_by_name() {
    let rotated = [
        0.5, 0.1, 0.0, 10.0, 0.1, -0.5, 0.0, 50.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0,
    ];
    let e = write_and_read("rotated.tif", &small_spec(4326, true, Some(rotated))).unwrap_err();
    assert!(matches!(e, RasterError::Transform { .. }) && e.to_string().contains("rotated.tif"));
    // ETRS89 geographic (EPSG:4258) is not EPSG:4326: refused, naming both.
    let e = write_and_read("etrs89.tif", &small_spec(4258, true, None)).unwrap_err();
    let msg = e.to_string();
    assert!(
        msg.contains("etrs89.tif") && msg.contains("EPSG:4258"),
        "{msg}"
    );
    // A projected system we do not carry (British National Grid).
    let e = write_and_read("bng.tif", &small_spec(27700, false, None)).unwrap_err();
    assert!(e.to_string().contains("EPSG:27700"), "{e}");
    // UTM zone 33 South is carried.
    let r = write_and_read("utm33s.tif", &small_spec(32733, false, None)).unwrap();
    assert_eq!(r.crs().epsg(), 32733);
}

#[test]
fn float_nodata_is_matched_in_the_band_type() {
    use cairn::geo::raster::{GeoTransform, RasterCrs};
    // GDAL semantics: nodata "0.1" on a float32 band means the f32 nearest 0.1.
    let t = GeoTransform {
        x0: 0.0,
        y0: 1.0,
        dx: 1.0,
        dy: -1.0,
    };
    let data = RasterData::F32(vec![0.1, 0.2]);
    let r = Raster::from_parts("f.tif", 2, 1, t, RasterCrs::Geographic, Some(0.1), data).unwrap();
    assert_eq!(r.cell_value(0, 0), None);
    assert_eq!(r.cell_value(1, 0), Some(f64::from(0.2f32)));
}
