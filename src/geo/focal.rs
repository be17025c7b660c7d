//! Proportion of class groups within a radius of each location on a categorical raster.
//!
//! A *class group* is a named set of integer class codes ("forest" = {1, 2}). For a
//! location and a radius R (metres) the window is the set of raster cells whose
//! **centres** lie inside the square of half-width R (`Window::Square`) or the disc
//! of radius R (`Window::Circle`) around the location, boundary included (up to
//! floating-point rounding of a centre lying exactly on it). Only cells
//! inside the raster count, so a window crossing the raster edge is simply smaller
//! (its `cells` count says by how much). Nodata cells are counted separately; each
//! group's proportion is its share of the *valid* (non-nodata) cells in the window,
//! and the nodata fraction is nodata / cells. A location outside the raster extent
//! is not annotated at all (no proportions from a sliver of window).
//!
//! On a geographic (EPSG:4326) raster the radius is converted to degrees with the
//! metres per degree of longitude and latitude on the WGS84 ellipsoid at the
//! location's latitude ([`crate::geo::proj::metres_per_degree`]), so the square is a
//! longitude/latitude rectangle and the disc an ellipse in degrees. That is exact to
//! first order; the neglected change of scale across the window is about
//! R·tan φ / 6 371 km (0.14 % for R = 5 km at 60°).
//!
//! Speed: one pre-pass over the raster builds a table per group plus one for nodata,
//! interleaved so one look-up reads them all.
//! - Square: summed-area tables (Crow 1984); a window costs four look-ups whatever the
//!   radius. Memory: 4 bytes × (rows + 1) × (columns + 1) × (groups + 1).
//! - Circle: the disc is a union of row runs, one per window row. Each row's run is
//!   found with the distance test itself, ((c + ½ − u)·mx)² + ((r + ½ − v)·my)² ≤ R²
//!   for pixel position (u, v) and cell size (mx, my) in metres, walking the run's ends
//!   from the previous row's. Each table is kept per row as a bit plane (bit set = cell
//!   in the table) with a rank directory (the count before every 64-cell word;
//!   Jacobson 1989), so a run of up to 64 cells costs one popcount per table and a
//!   longer one two popcounts and two directory entries. A disc costs
//!   O(rows in the window) ≈ 2R / cell size. Memory: 12 bytes × rows ×
//!   (⌊columns / 64⌋ + 1) × (groups + 1), about 1.5 bits per cell per table (33 MB for
//!   5 000 × 5 000 cells and 7 tables; 132 MB for 10 000 × 10 000).
//!
//! Both give the exact integer counts of the definition above: the disc is centred on
//! the location itself, not snapped to the centre of the cell containing it.
//! Batch queries are visited in raster-block order for cache reuse.

use rayon::prelude::*;
use thiserror::Error;

use super::proj::metres_per_degree;
use super::raster::{Raster, RasterCrs, RasterData};

/// Shape of the neighbourhood window.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Window {
    /// Cells whose centres satisfy |Δx| ≤ R and |Δy| ≤ R.
    Square,
    /// Cells whose centres satisfy Δx² + Δy² ≤ R².
    Circle,
}

/// A named set of class codes whose combined proportion is wanted.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ClassGroup {
    /// Column name for the group.
    pub name: String,
    /// Class codes belonging to it.
    pub codes: Vec<i64>,
}

impl ClassGroup {
    /// A group from a name and its codes.
    pub fn new(name: impl Into<String>, codes: impl Into<Vec<i64>>) -> Self {
        ClassGroup {
            name: name.into(),
            codes: codes.into(),
        }
    }
}

/// Errors when preparing class proportions.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum FocalError {
    /// Float raster given where class codes are needed.
    #[error(
        "raster {path} holds floating-point values; class proportions need a raster of integer class codes (use it as a continuous layer instead)"
    )]
    NotCategorical {
        /// File.
        path: String,
    },
    /// Radius not finite and positive.
    #[error("class-proportion radius must be a positive number of metres, got {radius}")]
    Radius {
        /// Radius given.
        radius: f64,
    },
    /// No groups, more than 64 groups, or a group without codes.
    #[error("class groups for raster {path}: {detail}")]
    Groups {
        /// File.
        path: String,
        /// What is wrong.
        detail: String,
    },
    /// Raster too large for 32-bit cell counts.
    #[error(
        "raster {path} has {cells} cells, more than the 4 294 967 295 the class-proportion tables can count; crop or coarsen it"
    )]
    TooLarge {
        /// File.
        path: String,
        /// Number of cells.
        cells: usize,
    },
}

/// Why a location received no class proportions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FocalMiss {
    /// The location lies outside the raster extent.
    OutsideRaster,
    /// The longitude/latitude is invalid or cannot be projected to the raster's system.
    Coordinate,
}

/// Cell counts in one window.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WindowCounts {
    /// Cells of the raster inside the window (valid + nodata).
    pub cells: u32,
    /// Nodata cells among them.
    pub nodata: u32,
    /// Valid cells of each group, in the order the groups were given.
    pub per_group: Vec<u32>,
}

impl WindowCounts {
    /// Share of valid cells belonging to group `g`; `None` when the window has no valid cell.
    pub fn proportion(&self, g: usize) -> Option<f64> {
        let valid = self.cells - self.nodata;
        (valid > 0).then(|| f64::from(self.per_group[g]) / f64::from(valid))
    }

    /// Nodata cells / cells in the window; `None` for an empty window.
    pub fn nodata_fraction(&self) -> Option<f64> {
        (self.cells > 0).then(|| f64::from(self.nodata) / f64::from(self.cells))
    }
}

/// Summed-area tables of a categorical raster, ready to answer window queries.
///
/// # Examples
/// ```
/// use cairn::geo::focal::{ClassGroup, ClassProportions, Window};
/// use cairn::geo::proj::Projection;
/// use cairn::geo::raster::{GeoTransform, Raster, RasterCrs, RasterData};
/// // 3 x 3 cells of 10 m, codes 1 and 2, one nodata (0).
/// let t = GeoTransform { x0: 500_000.0, y0: 5_000_030.0, dx: 10.0, dy: -10.0 };
/// let crs = RasterCrs::Projected(Projection::utm(33, false).unwrap());
/// let data = RasterData::U8(vec![1, 1, 2, 2, 0, 1, 1, 1, 1]);
/// let r = Raster::from_parts("demo", 3, 3, t, crs, Some(0.0), data).unwrap();
/// let groups = vec![ClassGroup::new("one", [1]), ClassGroup::new("two", [2])];
/// let cp = ClassProportions::build(&r, groups, 10.0, Window::Square).unwrap();
/// let c = cp.counts_xy(500_015.0, 5_000_015.0).unwrap(); // centre cell, 3x3 window
/// assert_eq!((c.cells, c.nodata, c.per_group.clone()), (9, 1, vec![6, 2]));
/// assert_eq!(c.proportion(1), Some(0.25));
/// ```
pub struct ClassProportions<'r> {
    raster: &'r Raster,
    groups: Vec<ClassGroup>,
    radius_m: f64,
    window: Window,
    tables: Tables,
}

/// The pre-computed tables, m = groups + 1 of them (groups in order, then nodata).
enum Tables {
    /// Square window. Interleaved summed-area tables: entry ((r·(width+1) + c)·m + k)
    /// holds table k at corner (r, c). Interleaving puts all the tables one look-up
    /// needs in one cache line.
    Summed(Vec<u32>),
    /// Circle window: per-row bit planes with a rank directory.
    Rows(RowBits),
}

impl Tables {
    /// The tables `window` needs, from per-cell bit masks of the m indicator layers.
    fn build<F: Fn(usize) -> u128 + Sync>(
        window: Window,
        w: usize,
        h: usize,
        m: usize,
        mask: F,
    ) -> Self {
        match window {
            Window::Square => Tables::Summed(summed_area(w, h, m, mask)),
            Window::Circle => Tables::Rows(RowBits::build(w, h, m, mask)),
        }
    }
}

/// Per-row bit planes of the m indicator layers with a rank directory.
///
/// Word j of row r covers columns 64j .. 64j + 63; entry ((r·words + j)·m + k) of
/// `bits` has bit b set when cell (r, 64j + b) belongs to table k, and the same entry
/// of `before` counts the cells of table k in columns < 64j of row r. The spare last
/// word (words = ⌊width / 64⌋ + 1) lets the rank of column `width` be read like any
/// other.
struct RowBits {
    words: usize,
    bits: Vec<u64>,
    before: Vec<u32>,
}

impl RowBits {
    /// Per-row bit planes of `m` indicator layers given per cell as bit masks.
    fn build<F: Fn(usize) -> u128 + Sync>(w: usize, h: usize, m: usize, mask: F) -> Self {
        let words = w / 64 + 1;
        let row_len = words * m;
        let mut bits = vec![0u64; row_len * h];
        let mut before = vec![0u32; row_len * h];
        bits.par_chunks_mut(row_len)
            .zip(before.par_chunks_mut(row_len))
            .enumerate()
            .for_each(|(r, (bits, before))| {
                for c in 0..w {
                    let mut tables = mask(r * w + c);
                    let word = &mut bits[(c / 64) * m..(c / 64 + 1) * m];
                    while tables != 0 {
                        word[tables.trailing_zeros() as usize] |= 1 << (c % 64);
                        tables &= tables - 1;
                    }
                }
                let mut total = [0u32; 65];
                for (b, p) in bits.chunks_exact(m).zip(before.chunks_exact_mut(m)) {
                    p.copy_from_slice(&total[..m]);
                    for (t, word) in total.iter_mut().zip(b) {
                        *t += word.count_ones();
                    }
                }
            });
        RowBits {
            words,
            bits,
            before,
        }
    }

    /// Add the counts of row `row`, columns c0..=c1 (c1 < width) of every table to `acc`
    /// (one entry per table).
    ///
    /// # Formula
    /// A run of at most 64 cells lies in the words of c0 and c1 (the same word or two
    /// neighbours): shifted together so bit 0 is column c0 and masked to the run's
    /// length, they give its count in one popcount. A longer run uses the rank
    /// rank(i) = before[⌊i/64⌋] + popcount(word[⌊i/64⌋] & (2^(i mod 64) − 1)) of the
    /// cells in columns < i: the run holds rank(c1 + 1) − rank(c0).
    #[inline]
    fn add_run(&self, acc: &mut [u32], row: usize, c0: usize, c1: usize) {
        let m = acc.len();
        let row_base = row * self.words * m;
        let len = c1 + 1 - c0;
        if len <= 64 {
            let (lo, hi) = (row_base + (c0 / 64) * m, row_base + (c1 / 64) * m);
            let (b0, b1) = (&self.bits[lo..lo + m], &self.bits[hi..hi + m]);
            let s = c0 % 64;
            let keep = u64::MAX >> (64 - len);
            for k in 0..m {
                // `<< 1 << (63 − s)` is `<< (64 − s)` without overflow at s = 0. When
                // both ends share a word, its bits shifted up lie beyond the run's length.
                let run = (b0[k] >> s) | (b1[k] << 1 << (63 - s));
                acc[k] += (run & keep).count_ones();
            }
        } else {
            let end = c1 + 1;
            let (lo, hi) = (row_base + (c0 / 64) * m, row_base + (end / 64) * m);
            let below_c0 = (1u64 << (c0 % 64)) - 1;
            let below_end = (1u64 << (end % 64)) - 1;
            let (b0, b1) = (&self.bits[lo..lo + m], &self.bits[hi..hi + m]);
            let (p0, p1) = (&self.before[lo..lo + m], &self.before[hi..hi + m]);
            for k in 0..m {
                // Cells in [64⌊c0/64⌋, 64⌊end/64⌋) minus those before c0 is never negative.
                acc[k] += (p1[k] - p0[k] - (b0[k] & below_c0).count_ones())
                    + (b1[k] & below_end).count_ones();
            }
        }
    }
}

// By hand: the derived form would print every table entry.
impl std::fmt::Debug for ClassProportions<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ClassProportions")
            .field("raster", &self.raster.path())
            .field("groups", &self.groups)
            .field("radius_m", &self.radius_m)
            .field("window", &self.window)
            .finish_non_exhaustive()
    }
}

/// Side, in cells, of the raster blocks used to order batch queries for cache reuse.
const QUERY_BLOCK: f64 = 64.0;

/// Bit mask of the tables (groups, then nodata at bit `n_groups`) a code belongs to.
/// 128 bits: with 64 groups the nodata table is bit 64.
fn code_mask(v: i64, groups: &[ClassGroup], nodata: Option<i64>) -> u128 {
    if Some(v) == nodata {
        return 1 << groups.len();
    }
    groups
        .iter()
        .enumerate()
        .filter(|(_, g)| g.codes.contains(&v))
        .fold(0, |m, (k, _)| m | (1 << k))
}

/// Interleaved summed-area tables of `m` indicator layers given per cell as bit masks.
///
/// # Formula
/// Crow, F. C. (1984), "Summed-area tables for texture mapping", SIGGRAPH '84,
/// 207–212: S(r, c) = S(r−1, c) + Σ_{c' < c} p(r−1, c'); any rectangle's sum is
/// S(r₁, c₁) − S(r₀, c₁) − S(r₁, c₀) + S(r₀, c₀). The raster is cut into horizontal
/// bands built in parallel, each from zero; each band is then offset by the
/// running total of the bands above it (last row of the previous band).
fn summed_area<F: Fn(usize) -> u128 + Sync>(w: usize, h: usize, m: usize, mask: F) -> Vec<u32> {
    let row_len = (w + 1) * m;
    let mut s = vec![0u32; row_len * (h + 1)];
    let bands = rayon::current_num_threads().clamp(1, h);
    let band_rows = h.div_ceil(bands);
    // Pass 1: each band's table as if the raster started at its first row.
    s[row_len..]
        .par_chunks_mut(row_len * band_rows)
        .enumerate()
        .for_each(|(b, band)| {
            let first = b * band_rows;
            let mut prev = vec![0u32; row_len];
            for (i, row) in band.chunks_mut(row_len).enumerate() {
                let r = first + i;
                let mut run = [0u32; 65];
                for c in 0..w {
                    let bits = mask(r * w + c);
                    let base = (c + 1) * m;
                    for k in 0..m {
                        run[k] += ((bits >> k) & 1) as u32;
                        row[base + k] = prev[base + k].wrapping_add(run[k]);
                    }
                }
                prev.copy_from_slice(row);
            }
        });
    // Pass 2: add the totals of the rows above each band (sequential over bands,
    // parallel within). Wrapping: intermediate sums may pass 2^32 on huge rasters;
    // rectangle sums taken with wrapping arithmetic are still exact.
    for b in 1..bands {
        let start = 1 + b * band_rows;
        if start > h {
            break;
        }
        let (above, below) = s.split_at_mut(start * row_len);
        let offset = &above[(start - 1) * row_len..];
        let end = (band_rows * row_len).min(below.len());
        below[..end].par_chunks_mut(row_len).for_each(|row| {
            for (x, o) in row.iter_mut().zip(offset) {
                *x = x.wrapping_add(*o);
            }
        });
    }
    s
}

impl<'r> ClassProportions<'r> {
    /// Check the settings and build the tables (the pre-pass).
    ///
    /// # Errors
    /// [`FocalError`] for a float raster, a non-positive radius, no groups, more than
    /// 64 groups, a group without codes, or a raster over 2³² − 1 cells.
    pub fn build(
        raster: &'r Raster,
        groups: Vec<ClassGroup>,
        radius_m: f64,
        window: Window,
    ) -> Result<Self, FocalError> {
        let path = raster.path().display().to_string();
        if raster.data().is_float() {
            return Err(FocalError::NotCategorical { path });
        }
        if !(radius_m.is_finite() && radius_m > 0.0) {
            return Err(FocalError::Radius { radius: radius_m });
        }
        let groups_err = |detail: String| FocalError::Groups {
            path: path.clone(),
            detail,
        };
        if groups.is_empty() || groups.len() > 64 {
            return Err(groups_err(format!(
                "need between 1 and 64 groups, got {}",
                groups.len()
            )));
        }
        if let Some(g) = groups.iter().find(|g| g.codes.is_empty()) {
            return Err(groups_err(format!(
                "group '{}' lists no class codes",
                g.name
            )));
        }
        let (w, h) = (raster.width(), raster.height());
        if w * h > u32::MAX as usize {
            return Err(FocalError::TooLarge { path, cells: w * h });
        }
        // Integers are exact in f64, so a whole-number nodata compares exactly as i64;
        // a fractional nodata can never equal an integer sample.
        let nd = raster
            .nodata()
            .filter(|v| v.fract() == 0.0)
            .map(|v| v as i64);
        let m = groups.len() + 1;
        let lut = |range: std::ops::RangeInclusive<i64>| -> Vec<u128> {
            range.map(|v| code_mask(v, &groups, nd)).collect()
        };
        let tables = match raster.data() {
            RasterData::U8(v) => {
                let l = lut(0..=255);
                Tables::build(window, w, h, m, |i| l[v[i] as usize])
            }
            RasterData::U16(v) => {
                let l = lut(0..=65_535);
                Tables::build(window, w, h, m, |i| l[v[i] as usize])
            }
            RasterData::I16(v) => {
                let l = lut(-32_768..=32_767);
                Tables::build(window, w, h, m, |i| l[(i32::from(v[i]) + 32_768) as usize])
            }
            RasterData::I32(v) => {
                Tables::build(window, w, h, m, |i| code_mask(i64::from(v[i]), &groups, nd))
            }
            RasterData::F32(_) | RasterData::F64(_) => {
                unreachable!("float rasters rejected above")
            }
        };
        Ok(ClassProportions {
            raster,
            groups,
            radius_m,
            window,
            tables,
        })
    }

    /// The groups, in output order.
    pub fn groups(&self) -> &[ClassGroup] {
        &self.groups
    }
    /// Radius in metres.
    pub fn radius_m(&self) -> f64 {
        self.radius_m
    }
    /// Window shape.
    pub fn window(&self) -> Window {
        self.window
    }

    /// Add the counts of rows r0..=r1, columns c0..=c1 to `counts`.
    #[inline]
    fn add_rect(
        &self,
        t: &[u32],
        counts: &mut WindowCounts,
        r0: usize,
        r1: usize,
        c0: usize,
        c1: usize,
    ) {
        let m = self.groups.len() + 1;
        let s = (self.raster.width() + 1) * m;
        let (a, b) = ((r1 + 1) * s + (c1 + 1) * m, r0 * s + c0 * m);
        let (c, d) = (r0 * s + (c1 + 1) * m, (r1 + 1) * s + c0 * m);
        let sum = |k: usize| {
            t[a + k]
                .wrapping_add(t[b + k])
                .wrapping_sub(t[c + k])
                .wrapping_sub(t[d + k])
        };
        counts.cells += ((r1 - r0 + 1) * (c1 - c0 + 1)) as u32;
        for (k, g) in counts.per_group.iter_mut().enumerate() {
            *g += sum(k);
        }
        counts.nodata += sum(m - 1);
    }

    /// Window counts around a point in the raster's own coordinates.
    ///
    /// # Errors
    /// [`FocalMiss::OutsideRaster`] when (x, y) is outside the raster extent;
    /// [`FocalMiss::Coordinate`] for non-finite input.
    pub fn counts_xy(&self, x: f64, y: f64) -> Result<WindowCounts, FocalMiss> {
        if !(x.is_finite() && y.is_finite()) {
            return Err(FocalMiss::Coordinate);
        }
        let r = self.raster;
        if r.cell_at(x, y).is_none() {
            return Err(FocalMiss::OutsideRaster);
        }
        let t = r.transform();
        let (u, v) = t.to_pixel(x, y);
        // Cell size in metres along x and y at this location.
        let (mx, my) = match r.crs() {
            RasterCrs::Projected(_) => (t.dx.abs(), t.dy.abs()),
            RasterCrs::Geographic => {
                let (mlon, mlat) = metres_per_degree(y);
                (t.dx.abs() * mlon, t.dy.abs() * mlat)
            }
        };
        let (w, h) = (r.width() as f64, r.height() as f64);
        // Indices k with |(k + ½ − p)·m| ≤ half, clipped to [0, n−1]. Near the poles
        // of a geographic raster half/m can be huge or infinite; clipping handles it.
        let span = |p: f64, half_m: f64, m: f64, n: f64| -> Option<(usize, usize)> {
            let half = half_m / m;
            let lo = (p - half - 0.5).ceil().max(0.0);
            let hi = (p + half - 0.5).floor().min(n - 1.0);
            (lo <= hi).then_some((lo as usize, hi as usize))
        };
        let mut counts = WindowCounts {
            cells: 0,
            nodata: 0,
            per_group: vec![0; self.groups.len()],
        };
        let Some((r0, r1)) = span(v, self.radius_m, my, h) else {
            return Ok(counts);
        };
        match &self.tables {
            Tables::Summed(t) => {
                if let Some((c0, c1)) = span(u, self.radius_m, mx, w) {
                    self.add_rect(t, &mut counts, r0, r1, c0, c1);
                }
            }
            Tables::Rows(rows) => {
                let m = self.groups.len() + 1;
                let mut acc = [0u32; 65];
                let acc = &mut acc[..m];
                let r2 = self.radius_m * self.radius_m;
                let (w, h) = (r.width() as i64, r.height());
                let ex = |c: i64| (c as f64 + 0.5 - u) * mx;
                // Row `row` holds the columns c with ex(c)² + ey² ≤ R²: those with
                // `right_ok` (centre left of the location or inside) and `left_ok`
                // (right of it or inside). Both are monotone in c, so each run end is
                // walked from the previous row's, O(rows + columns in the window) in
                // all, with no square root or rounding per row. After the first row
                // the run only widens (ey² not above the previous row's) or only
                // narrows, so one walk per end suffices. The walks stay in -1..=w, so
                // they end even for the unbounded spans near a pole.
                let right_ok = |c: i64, ey2: f64| {
                    let e = ex(c);
                    e <= 0.0 || e * e + ey2 <= r2
                };
                let left_ok = |c: i64, ey2: f64| {
                    let e = ex(c);
                    e >= 0.0 || e * e + ey2 <= r2
                };
                let (mut lo, mut hi) = ((u as i64).clamp(0, w - 1), (u as i64).clamp(0, w - 1));
                let (mut first, mut prev_ey2) = (true, f64::INFINITY);
                // The rows from `span` widened by one, so its rounding cannot drop a row.
                for row in r0.saturating_sub(1)..=(r1 + 1).min(h - 1) {
                    let ey = (row as f64 + 0.5 - v) * my;
                    let ey2 = ey * ey;
                    if ey2.is_nan() || ey2 > r2 {
                        continue;
                    }
                    let widening = ey2 <= prev_ey2;
                    if widening || first {
                        while hi + 1 < w && right_ok(hi + 1, ey2) {
                            hi += 1;
                        }
                        while lo > 0 && left_ok(lo - 1, ey2) {
                            lo -= 1;
                        }
                    }
                    if !widening || first {
                        while hi >= 0 && !right_ok(hi, ey2) {
                            hi -= 1;
                        }
                        while lo < w && !left_ok(lo, ey2) {
                            lo += 1;
                        }
                    }
                    first = false;
                    prev_ey2 = ey2;
                    if lo <= hi {
                        counts.cells += (hi - lo + 1) as u32;
                        rows.add_run(acc, row, lo as usize, hi as usize);
                    }
                }
                counts.per_group.copy_from_slice(&acc[..m - 1]);
                counts.nodata = acc[m - 1];
            }
        }
        Ok(counts)
    }

    /// Window counts around a WGS84 longitude/latitude.
    ///
    /// # Errors
    /// As [`ClassProportions::counts_xy`]; [`FocalMiss::Coordinate`] when the
    /// position cannot be converted to the raster's system.
    pub fn counts_lonlat(&self, lon: f64, lat: f64) -> Result<WindowCounts, FocalMiss> {
        let (x, y) = self
            .raster
            .crs()
            .from_lonlat(lon, lat)
            .map_err(|_| FocalMiss::Coordinate)?;
        self.counts_xy(x, y)
    }

    /// [`ClassProportions::counts_lonlat`] for many locations, in input order.
    ///
    /// # Panics
    /// When `lons` and `lats` differ in length.
    pub fn counts_many_lonlat(
        &self,
        lons: &[f64],
        lats: &[f64],
    ) -> Vec<Result<WindowCounts, FocalMiss>> {
        let (xs, ys) = self.raster.crs().from_lonlat_many(lons, lats);
        self.counts_many_xy(&xs, &ys)
    }

    /// [`ClassProportions::counts_xy`] for many points in the raster's coordinates
    /// (non-finite coordinates give [`FocalMiss::Coordinate`]), in input order.
    ///
    /// Points are visited in order of the 64 × 64-cell raster block they fall in, so
    /// neighbouring windows share cached table rows; results go back to input order
    /// and do not depend on the thread count.
    ///
    /// # Panics
    /// When `xs` and `ys` differ in length.
    pub fn counts_many_xy(&self, xs: &[f64], ys: &[f64]) -> Vec<Result<WindowCounts, FocalMiss>> {
        assert_eq!(xs.len(), ys.len(), "one y per x");
        let t = self.raster.transform();
        let blocks_across = (self.raster.width() as f64 / QUERY_BLOCK).ceil() + 1.0;
        let keys: Vec<u64> = xs
            .par_iter()
            .zip(ys.par_iter())
            .map(|(&x, &y)| {
                let (u, v) = t.to_pixel(x, y);
                let (bu, bv) = ((u / QUERY_BLOCK).floor(), (v / QUERY_BLOCK).floor());
                if bu.is_finite() && bv.is_finite() && bu >= 0.0 && bv >= 0.0 {
                    (bv * blocks_across + bu).min(u64::MAX as f64) as u64
                } else {
                    u64::MAX
                }
            })
            .collect();
        let mut order: Vec<usize> = (0..xs.len()).collect();
        order.par_sort_by_key(|&i| keys[i]);
        let in_block_order: Vec<Result<WindowCounts, FocalMiss>> = order
            .par_iter()
            .map(|&i| self.counts_xy(xs[i], ys[i]))
            .collect();
        let mut out: Vec<Option<Result<WindowCounts, FocalMiss>>> = vec![None; xs.len()];
        for (&i, r) in order.iter().zip(in_block_order) {
            out[i] = Some(r);
        }
        out.into_iter()
            .map(|r| r.expect("every location visited once"))
            .collect()
    }
}
