//! The invented fjord: a water mask drawn from arms (polylines with a half-width at each
//! vertex) minus islands, a distance-to-shore transform, a bathymetry that deepens away
//! from the shore, and seabed classes from depth and a seeded noise field.
//!
//! Everything is built on the habitat grid (25 m cells, WGS84 / UTM zone 34N); the depth
//! raster (100 m cells) holds the mean depth of the water in each 4 × 4 block, and is
//! nodata only where the block holds no water. Land is nodata in both rasters, so class
//! proportions are shares of seabed and depth has no value ashore.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::geo::focal::{ClassGroup, ClassProportions, FocalError, Window};
use crate::geo::interp::bilinear;
use crate::geo::proj::Projection;
use crate::geo::raster::{GeoTransform, Raster, RasterCrs, RasterData};

/// EPSG code of the rasters: WGS84 / UTM zone 34N.
pub const EPSG: u16 = 32634;
/// UTM zone of [`EPSG`].
pub const UTM_ZONE: u8 = 34;
/// x (easting, m) of the rasters' west edge.
pub const X0: f64 = 440_000.0;
/// y (northing, m) of the rasters' north edge.
pub const Y0: f64 = 7_790_000.0;
/// East–west extent, metres.
pub const WIDTH_M: f64 = 30_000.0;
/// North–south extent, metres.
pub const HEIGHT_M: f64 = 20_000.0;
/// Habitat cell size, metres.
pub const HABITAT_CELL: f64 = 25.0;
/// Depth cell size, metres (a whole multiple of the habitat cell).
pub const DEPTH_CELL: f64 = 100.0;
/// Habitat nodata code (land).
pub const LAND: u8 = 255;
/// Depth nodata value (land).
pub const DEPTH_NODATA: f32 = -9999.0;
/// Radius of the kelp-proportion window, metres (declared in the study file too).
pub const KELP_RADIUS_M: f64 = 250.0;

/// Seabed classes: code and study-file group name.
pub const CLASSES: [(u8, &str); 5] = [
    (1, "kelp"),
    (2, "rock"),
    (3, "sand"),
    (4, "mud"),
    (5, "channel"),
];

/// One arm of the fjord: a centreline in local metres (east, north from the south-west
/// corner), the half-width at each vertex and the depth the arm reaches far from shore.
struct Arm {
    line: &'static [(f64, f64)],
    half_width: &'static [f64],
    max_depth: f64,
}

/// Main channel from the open sea in the west to the head in the east, a northern and a
/// southern side arm.
const ARMS: [Arm; 3] = [
    Arm {
        line: &[
            (-1_000.0, 9_500.0),
            (4_000.0, 10_500.0),
            (8_000.0, 9_200.0),
            (12_000.0, 11_000.0),
            (16_000.0, 10_000.0),
            (20_000.0, 12_000.0),
            (24_000.0, 11_000.0),
            (27_500.0, 11_500.0),
        ],
        half_width: &[
            4_600.0, 3_800.0, 3_200.0, 2_800.0, 3_800.0, 2_600.0, 2_000.0, 1_200.0,
        ],
        max_depth: 270.0,
    },
    Arm {
        line: &[
            (12_000.0, 11_000.0),
            (13_200.0, 14_500.0),
            (11_500.0, 17_800.0),
        ],
        half_width: &[1_500.0, 1_400.0, 1_000.0],
        max_depth: 110.0,
    },
    Arm {
        line: &[
            (20_000.0, 12_000.0),
            (21_600.0, 8_000.0),
            (20_600.0, 4_200.0),
        ],
        half_width: &[1_600.0, 1_500.0, 1_000.0],
        max_depth: 150.0,
    },
];

/// Islands and skerries: centre (local metres) and radius.
const ISLANDS: [(f64, f64, f64); 7] = [
    (6_000.0, 10_200.0, 700.0),
    (9_000.0, 10_000.0, 260.0),
    (9_500.0, 8_900.0, 180.0),
    (14_500.0, 11_000.0, 450.0),
    (17_200.0, 9_000.0, 300.0),
    (2_500.0, 7_800.0, 220.0),
    (23_000.0, 11_500.0, 160.0),
];

/// The synthetic landscape: the two rasters in memory, exactly as written to disk.
pub struct Landscape {
    /// Seabed classes, u8, [`LAND`] = nodata.
    pub habitat: Raster,
    /// Water depth, metres positive down, f32, [`DEPTH_NODATA`] on land.
    pub depth: Raster,
    /// The projection of both rasters.
    pub utm: Projection,
}

/// Distance from (px, py) to the segment a–b, and the position t ∈ [0, 1] along it.
fn segment_distance(px: f64, py: f64, a: (f64, f64), b: (f64, f64)) -> (f64, f64) {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((px - a.0) * dx + (py - a.1) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    ((px - a.0 - t * dx).hypot(py - a.1 - t * dy), t)
}

/// The deepest arm containing a local point, if any (its maximum depth).
fn arm_depth(e: f64, n: f64) -> Option<f64> {
    let mut best: Option<f64> = None;
    for arm in &ARMS {
        for k in 0..arm.line.len() - 1 {
            let (d, t) = segment_distance(e, n, arm.line[k], arm.line[k + 1]);
            let hw = arm.half_width[k] + t * (arm.half_width[k + 1] - arm.half_width[k]);
            if d <= hw {
                best = Some(best.map_or(arm.max_depth, |b: f64| b.max(arm.max_depth)));
            }
        }
    }
    let on_island = ISLANDS
        .iter()
        .any(|&(ie, in_, r)| (e - ie).hypot(n - in_) <= r);
    if on_island { None } else { best }
}

/// Smooth value noise in [−1, 1]: a seeded lattice of `spacing` metres blended with the
/// smoothstep weights.
struct ValueNoise {
    cols: usize,
    spacing: f64,
    values: Vec<f64>,
}

impl ValueNoise {
    fn new(rng: &mut ChaCha8Rng, spacing: f64) -> Self {
        let cols = (WIDTH_M / spacing) as usize + 2;
        let rows = (HEIGHT_M / spacing) as usize + 2;
        let values = (0..cols * rows)
            .map(|_| rng.random_range(-1.0..1.0))
            .collect();
        ValueNoise {
            cols,
            spacing,
            values,
        }
    }

    fn at(&self, e: f64, n: f64) -> f64 {
        let (u, v) = (e / self.spacing, n / self.spacing);
        let (i, j) = (u.floor() as usize, v.floor() as usize);
        let s = |f: f64| f * f * (3.0 - 2.0 * f);
        let (a, b) = (s(u - i as f64), s(v - j as f64));
        let z = |c: usize, r: usize| self.values[r * self.cols + c];
        (1.0 - a) * (1.0 - b) * z(i, j)
            + a * (1.0 - b) * z(i + 1, j)
            + (1.0 - a) * b * z(i, j + 1)
            + a * b * z(i + 1, j + 1)
    }
}

/// Two-pass chamfer distance (3–4 weights on the 8-neighbourhood, Borgefors 1986,
/// *Computer Vision, Graphics, and Image Processing* 34:344–371) from every cell to the
/// nearest land cell, in metres; within about 8 % of the Euclidean distance. Cells are
/// treated as water beyond the grid edge (the open sea in the west).
fn distance_to_land(water: &[bool], w: usize, h: usize, cell: f64) -> Vec<f64> {
    let far = f64::INFINITY;
    let mut d: Vec<f64> = water.iter().map(|&wt| if wt { far } else { 0.0 }).collect();
    let (a, b) = (cell, cell * 4.0 / 3.0);
    for r in 0..h {
        for c in 0..w {
            let mut v = d[r * w + c];
            if c > 0 {
                v = v.min(d[r * w + c - 1] + a);
            }
            if r > 0 {
                v = v.min(d[(r - 1) * w + c] + a);
                if c > 0 {
                    v = v.min(d[(r - 1) * w + c - 1] + b);
                }
                if c + 1 < w {
                    v = v.min(d[(r - 1) * w + c + 1] + b);
                }
            }
            d[r * w + c] = v;
        }
    }
    for r in (0..h).rev() {
        for c in (0..w).rev() {
            let mut v = d[r * w + c];
            if c + 1 < w {
                v = v.min(d[r * w + c + 1] + a);
            }
            if r + 1 < h {
                v = v.min(d[(r + 1) * w + c] + a);
                if c + 1 < w {
                    v = v.min(d[(r + 1) * w + c + 1] + b);
                }
                if c > 0 {
                    v = v.min(d[(r + 1) * w + c - 1] + b);
                }
            }
            d[r * w + c] = v;
        }
    }
    d
}

/// Depth (m) at `dist` metres from the shore in an arm reaching `max_depth`: a shelf
/// sloping 4 % to 22 m at 500 m, then an exponential approach to the arm's depth.
fn depth_profile(dist: f64, max_depth: f64) -> f64 {
    if dist <= 500.0 {
        2.0 + 0.04 * dist
    } else {
        22.0 + (max_depth - 22.0) * (1.0 - (-(dist - 500.0) / 800.0).exp())
    }
}

/// Seabed class of a water cell from its depth and the substrate noise.
fn seabed_class(depth: f64, noise: f64) -> u8 {
    match depth {
        d if d < 20.0 => {
            if noise > -0.45 {
                1
            } else {
                2
            }
        }
        d if d < 40.0 => {
            if noise > 0.0 {
                2
            } else {
                3
            }
        }
        d if d < 90.0 => {
            if noise > 0.55 {
                2
            } else {
                3
            }
        }
        d if d < 160.0 => 4,
        _ => 5,
    }
}

impl Landscape {
    /// Builds the fjord; the noise fields (depth texture, substrate) come from `seed`.
    pub fn build(seed: u64) -> Landscape {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eab_ed00);
        let texture = ValueNoise::new(&mut rng, 1_500.0);
        let substrate = ValueNoise::new(&mut rng, 400.0);
        let w = (WIDTH_M / HABITAT_CELL) as usize;
        let h = (HEIGHT_M / HABITAT_CELL) as usize;
        let local = |c: usize, r: usize| {
            (
                (c as f64 + 0.5) * HABITAT_CELL,
                HEIGHT_M - (r as f64 + 0.5) * HABITAT_CELL,
            )
        };
        let arm_max: Vec<Option<f64>> = (0..w * h)
            .map(|i| {
                let (e, n) = local(i % w, i / w);
                arm_depth(e, n)
            })
            .collect();
        let water: Vec<bool> = arm_max.iter().map(Option::is_some).collect();
        let dist = distance_to_land(&water, w, h, HABITAT_CELL);
        let fine_depth: Vec<f64> = (0..w * h)
            .map(|i| match arm_max[i] {
                None => f64::NAN,
                Some(m) => {
                    let (e, n) = local(i % w, i / w);
                    let base = depth_profile(dist[i], m);
                    (base * (1.0 + 0.12 * texture.at(e, n))).max(0.5)
                }
            })
            .collect();
        let classes: Vec<u8> = (0..w * h)
            .map(|i| {
                if fine_depth[i].is_nan() {
                    LAND
                } else {
                    let (e, n) = local(i % w, i / w);
                    seabed_class(fine_depth[i], substrate.at(e, n))
                }
            })
            .collect();
        let k = (DEPTH_CELL / HABITAT_CELL) as usize;
        let (dw, dh) = (w / k, h / k);
        let coarse: Vec<f32> = (0..dw * dh)
            .map(|i| {
                let (c0, r0) = ((i % dw) * k, (i / dw) * k);
                let vals: Vec<f64> = (r0..r0 + k)
                    .flat_map(|r| (c0..c0 + k).map(move |c| r * w + c))
                    .map(|j| fine_depth[j])
                    .filter(|d| !d.is_nan())
                    .collect();
                if vals.is_empty() {
                    DEPTH_NODATA
                } else {
                    // Decimetres are all a bathymetric survey would claim.
                    ((vals.iter().sum::<f64>() / vals.len() as f64) * 10.0).round() as f32 / 10.0
                }
            })
            .collect();
        let utm = Projection::utm(UTM_ZONE, false).expect("zone 34 north is a valid UTM zone");
        let crs = RasterCrs::Projected(utm.clone());
        let transform = |cell: f64| GeoTransform {
            x0: X0,
            y0: Y0,
            dx: cell,
            dy: -cell,
        };
        let habitat = Raster::from_parts(
            "habitat.tif",
            w,
            h,
            transform(HABITAT_CELL),
            crs.clone(),
            Some(f64::from(LAND)),
            RasterData::U8(classes),
        )
        .expect("the habitat grid fills its extent");
        let depth = Raster::from_parts(
            "depth.tif",
            dw,
            dh,
            transform(DEPTH_CELL),
            crs,
            Some(f64::from(DEPTH_NODATA)),
            RasterData::F32(coarse),
        )
        .expect("the depth grid fills its extent");
        Landscape {
            habitat,
            depth,
            utm,
        }
    }

    /// The kelp-proportion calculator of the study's habitat layer (circle of
    /// [`KELP_RADIUS_M`]), the same one `prepare` builds from `habitat.tif`.
    ///
    /// # Errors
    /// [`FocalError`] only if the constants above were inconsistent.
    pub fn kelp(&self) -> Result<ClassProportions<'_>, FocalError> {
        ClassProportions::build(
            &self.habitat,
            vec![ClassGroup::new("kelp", [1])],
            KELP_RADIUS_M,
            Window::Circle,
        )
    }

    /// Water depth (m) at projected (x, y): bilinear between depth-cell centres, `None`
    /// on or next to land and outside the raster.
    pub fn depth_at(&self, x: f64, y: f64) -> Option<f64> {
        bilinear(&self.depth, x, y).ok()
    }

    /// Projected coordinates of a local point (metres east and north of the south-west
    /// corner).
    pub fn to_xy(e: f64, n: f64) -> (f64, f64) {
        (X0 + e, Y0 - HEIGHT_M + n)
    }
}
