//! Hotspot grids of state-days: where, and on how many animal-days, animals spent a
//! meaningful time in one behavioural state.
//!
//! Fixes are projected with an equal-area projection ([`Laea`], centred on the study
//! area unless a centre is given) onto square cells of a chosen size in km, so every
//! cell has the same true area. Each fix stands for the interval to the animal's next
//! fix (the last fix, and any interval longer than `max_interval_hours`, stands for
//! the animal's median interval instead, so a gap in the data does not pile hours
//! into one cell); that time is credited to the cell of the fix, to the state by the
//! chosen [`CountMethod`] (Viterbi: whole interval to the decoded state;
//! probabilities: interval × local probability).
//!
//! Per cell the grid reports: the number of distinct animal-days with at least
//! `min_hours_per_day` in the state in that cell, the number of distinct animals with
//! at least one such day, and the total hours in the state (all animal-days). Only
//! cells with one or more qualifying animal-days are listed. Days are UTC dates or
//! local dates ([`DayBasis`]); the local date is the UTC time shifted by the offset
//! implied by the table's local hour (local hour − UTC hour, wrapped to [−12, 12) h),
//! so it follows whichever local clock (civil or solar) the table was built with.
//!
//! Shareable outputs ([`HotspotGrid::write_csv`], [`HotspotGrid::to_geojson`]) leave
//! out cells with fewer than `min_animals` animals, so single individuals cannot be
//! located from a published map; the number left out is kept in the result. Coarser
//! grids for briefs ([`hotspot_grids`]) nest exactly in the fine one (cell edges at
//! multiples of the cell size from the projection centre) and recount distinct
//! animal-days from the fine accumulation rather than adding cell counts.
//!
//! Limitation: cell polygons are not split at the antimeridian; a grid whose cells
//! straddle ±180° gives polygons spanning the globe in lon/lat outputs.

use super::{CountMethod, Decoded, SummaryError, csv_num};
use crate::geo::laea::Laea;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::io::Write;

/// Which calendar day a fix belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum DayBasis {
    /// UTC calendar date.
    UtcDate,
    /// Local calendar date, from the offset implied by the local hour column.
    LocalDate,
}

/// Settings for [`hotspot_grid`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HotspotOptions {
    /// State index whose state-days are counted.
    pub state: usize,
    /// Cell edge, km (> 0).
    pub cell_km: f64,
    /// How time in the state is counted.
    pub method: CountMethod,
    /// Minimum hours in the state in a cell for an animal-day to count (≥ 0).
    pub min_hours_per_day: f64,
    /// UTC or local dates.
    pub day_basis: DayBasis,
    /// Cells with fewer distinct animals are left out of shareable outputs.
    pub min_animals: u32,
    /// Intervals longer than this (hours) are gaps: the fix then stands for the
    /// animal's median interval.
    pub max_interval_hours: f64,
    /// Projection centre (lon, lat) in degrees; `None`: the mean of the fixes'
    /// unit vectors (robust across the antimeridian).
    pub centre: Option<(f64, f64)>,
    /// Points inserted on each cell edge when inverse-projecting polygons, so edges
    /// follow the projected straight line closely (≥ 0).
    pub edge_points: usize,
}

impl Default for HotspotOptions {
    fn default() -> Self {
        HotspotOptions {
            state: 0,
            cell_km: 5.0,
            method: CountMethod::Viterbi,
            min_hours_per_day: 1.0,
            day_basis: DayBasis::UtcDate,
            min_animals: 3,
            max_interval_hours: 6.0,
            centre: None,
            edge_points: 3,
        }
    }
}

/// One grid cell with at least one qualifying animal-day.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HotspotCell {
    /// Column index: the cell spans x ∈ [col·s, (col+1)·s) metres.
    pub col: i64,
    /// Row index: the cell spans y ∈ [row·s, (row+1)·s) metres.
    pub row: i64,
    /// Distinct animal-days with at least the minimum hours in the state.
    pub animal_days: u32,
    /// Distinct animals with at least one such day.
    pub animals: u32,
    /// Total hours in the state in the cell (all animal-days).
    pub hours: f64,
    /// Cell centre (lon, lat), degrees.
    pub centre: (f64, f64),
    /// Closed outer ring (lon, lat), counter-clockwise, first point repeated last.
    pub polygon: Vec<(f64, f64)>,
}

/// A hotspot grid for one state at one cell size.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HotspotGrid {
    state: usize,
    state_label: String,
    method: CountMethod,
    day_basis: DayBasis,
    cell_km: f64,
    min_hours_per_day: f64,
    min_animals: u32,
    projection: Laea,
    cells: Vec<HotspotCell>,
}

/// Accumulated hours per (col, row, animal, day) at the finest cell size.
type Accum = HashMap<(i64, i64, u32, i64), f64>;

fn validate(d: &Decoded, o: &HotspotOptions) -> Result<(), SummaryError> {
    d.ensure_method(o.method)?;
    if o.state >= d.n_states() {
        return Err(SummaryError::option(
            "state",
            format!(
                "index {} but the model has {} states",
                o.state,
                d.n_states()
            ),
        ));
    }
    if !(o.cell_km.is_finite() && o.cell_km > 0.0) {
        return Err(SummaryError::option(
            "cell_km",
            format!("{} km; give a positive cell size", o.cell_km),
        ));
    }
    if !(o.min_hours_per_day.is_finite() && o.min_hours_per_day >= 0.0) {
        return Err(SummaryError::option(
            "min_hours_per_day",
            "must be a finite, non-negative number of hours",
        ));
    }
    if !(o.max_interval_hours.is_finite() && o.max_interval_hours > 0.0) {
        return Err(SummaryError::option(
            "max_interval_hours",
            "must be a positive number of hours",
        ));
    }
    if let Some((lon, lat)) = o.centre
        && !((-180.0..=180.0).contains(&lon) && (-90.0..=90.0).contains(&lat))
    {
        return Err(SummaryError::option(
            "centre",
            format!("({lon}, {lat}) is not a lon/lat position in degrees"),
        ));
    }
    Ok(())
}

/// Centre of the fixes: direction of the mean of their unit vectors. Any centre
/// inside the study area keeps the projection's shape distortion small; the mean
/// direction is cheap and behaves across the antimeridian.
fn mean_centre(d: &Decoded) -> (f64, f64) {
    let (mut x, mut y, mut z) = (0.0, 0.0, 0.0);
    for (&lon, &lat) in d.lon().iter().zip(d.lat()) {
        let (sl, cl) = lon.to_radians().sin_cos();
        let (sp, cp) = lat.to_radians().sin_cos();
        x += cp * cl;
        y += cp * sl;
        z += sp;
    }
    let h = (x * x + y * y).sqrt();
    if h < 1e-12 {
        return (0.0, if z >= 0.0 { 90.0 } else { -90.0 });
    }
    (y.atan2(x).to_degrees(), z.atan2(h).to_degrees())
}

const US_PER_DAY: i64 = 86_400_000_000;
const US_PER_HOUR: f64 = 3_600_000_000.0;

fn accumulate(d: &Decoded, o: &HotspotOptions, proj: &Laea) -> Accum {
    let cell_m = o.cell_km * 1000.0;
    let max_s = o.max_interval_hours * 3600.0;
    let per_animal: Vec<Accum> = d
        .animal_rows()
        .par_iter()
        .map(|rows| {
            let median_s = super::median_interval(d, rows);
            let mut acc = Accum::new();
            for i in rows.clone() {
                let w = d.weight(i, o.state, o.method);
                if w <= 0.0 {
                    continue;
                }
                let dt = d.interval_s()[i];
                let dt = if dt > max_s { median_s } else { dt };
                let (x, y) = proj.forward(d.lon()[i], d.lat()[i]);
                let col = (x / cell_m).floor() as i64;
                let row = (y / cell_m).floor() as i64;
                let t = d.time_us()[i];
                let day = match o.day_basis {
                    DayBasis::UtcDate => t.div_euclid(US_PER_DAY),
                    DayBasis::LocalDate => {
                        let utc_hour = t.rem_euclid(US_PER_DAY) as f64 / US_PER_HOUR;
                        let off = (d.local_hour()[i] - utc_hour + 12.0).rem_euclid(24.0) - 12.0;
                        (t + (off * US_PER_HOUR).round() as i64).div_euclid(US_PER_DAY)
                    }
                };
                *acc.entry((col, row, d.animal_of(i) as u32, day))
                    .or_insert(0.0) += w * dt / 3600.0;
            }
            acc
        })
        .collect();
    let mut all = Accum::new();
    for a in per_animal {
        // Keys contain the animal, so animals never collide: merging is a plain union.
        all.extend(a);
    }
    all
}

/// Count cells of a grid `factor` times coarser than the accumulation grid.
fn count_cells(
    acc: &Accum,
    factor: i64,
    min_hours: f64,
) -> BTreeMap<(i64, i64), (u32, Vec<u32>, f64)> {
    // Sort keys so that sums over fine cells run in a fixed order whatever the
    // hash map's iteration order.
    let mut keys: Vec<&(i64, i64, u32, i64)> = acc.keys().collect();
    keys.sort_unstable();
    let mut coarse: BTreeMap<(i64, i64, u32, i64), f64> = BTreeMap::new();
    for k in keys {
        let ck = (k.0.div_euclid(factor), k.1.div_euclid(factor), k.2, k.3);
        *coarse.entry(ck).or_insert(0.0) += acc[k];
    }
    let mut cells: BTreeMap<(i64, i64), (u32, Vec<u32>, f64)> = BTreeMap::new();
    for ((c, r, animal, _day), h) in coarse {
        let e = cells.entry((c, r)).or_insert((0, Vec::new(), 0.0));
        e.2 += h;
        if h >= min_hours && h > 0.0 {
            e.0 += 1;
            // BTreeMap order puts all days of one animal together within a cell.
            if e.1.last() != Some(&animal) {
                e.1.push(animal);
            }
        }
    }
    cells.retain(|_, v| v.0 > 0);
    cells
}

/// Closed lon/lat ring of grid cell (`col`, `row`) of size `cell_m` metres in
/// projection `proj`, with `edge_points` points inserted on each edge;
/// counter-clockwise, starting at the south-west corner.
pub fn cell_polygon(
    proj: &Laea,
    col: i64,
    row: i64,
    cell_m: f64,
    edge_points: usize,
) -> Vec<(f64, f64)> {
    let (x0, y0) = (col as f64 * cell_m, row as f64 * cell_m);
    let (x1, y1) = (x0 + cell_m, y0 + cell_m);
    // Counter-clockwise in projected (east, north) space: the projection keeps
    // orientation, so the lon/lat ring is counter-clockwise too (RFC 7946 §3.1.6).
    let corners = [(x0, y0), (x1, y0), (x1, y1), (x0, y1)];
    let k = edge_points + 1;
    let mut ring = Vec::with_capacity(4 * k + 1);
    for e in 0..4 {
        let (ax, ay) = corners[e];
        let (bx, by) = corners[(e + 1) % 4];
        for j in 0..k {
            let t = j as f64 / k as f64;
            ring.push(proj.inverse(ax + t * (bx - ax), ay + t * (by - ay)));
        }
    }
    ring.push(ring[0]);
    ring
}

fn build_grid(
    d: &Decoded,
    o: &HotspotOptions,
    proj: &Laea,
    acc: &Accum,
    factor: u32,
) -> HotspotGrid {
    let cell_km = o.cell_km * f64::from(factor);
    let cell_m = cell_km * 1000.0;
    let cells = count_cells(acc, i64::from(factor), o.min_hours_per_day)
        .into_iter()
        .map(|((col, row), (days, animals, hours))| HotspotCell {
            col,
            row,
            animal_days: days,
            animals: animals.len() as u32,
            hours,
            centre: proj.inverse((col as f64 + 0.5) * cell_m, (row as f64 + 0.5) * cell_m),
            polygon: cell_polygon(proj, col, row, cell_m, o.edge_points),
        })
        .collect();
    HotspotGrid {
        state: o.state,
        state_label: d.state_labels()[o.state].clone(),
        method: o.method,
        day_basis: o.day_basis,
        cell_km,
        min_hours_per_day: o.min_hours_per_day,
        min_animals: o.min_animals,
        projection: *proj,
        cells,
    }
}

/// Build the hotspot grid of state-days for one state.
///
/// # Errors
/// [`SummaryError::Option`] for a state index out of range, a non-positive cell size
/// or invalid hours; [`SummaryError::ProbabilitiesMissing`] for the probability
/// method without probabilities.
///
/// # Formula
/// Hours of animal a on day t in cell c: H_atc = Σ_{i∈(a,t,c)} w_i Δt_i, with w_i the
/// Viterbi indicator or local probability of the state and Δt_i the interval the fix
/// stands for. Animal-days: #{(a,t): H_atc ≥ h_min}. Projection: see [`Laea`].
///
/// # Examples
/// ```
/// use cairn::summaries::{Decoded, DecodedColumns, DielPhase};
/// use cairn::summaries::hotspots::{hotspot_grid, HotspotOptions};
/// let h = 3_600_000_000i64;
/// let cols = DecodedColumns {
///     state_labels: vec!["forage".into()],
///     animal: vec!["a".into(); 3],
///     time_us: vec![0, h, 2 * h],
///     lon: vec![10.0; 3], lat: vec![50.0; 3],
///     local_hour: vec![0.0, 1.0, 2.0],
///     diel: vec![DielPhase::Night; 3],
///     sun_elevation_deg: vec![-20.0; 3],
///     season: vec!["s".into(); 3],
///     viterbi: vec![0; 3],
///     step_m: vec![0.0; 3], angle_rad: vec![0.0; 3],
///     ..Default::default()
/// };
/// let d = Decoded::new(cols).unwrap();
/// let g = hotspot_grid(&d, &HotspotOptions { min_animals: 1, ..Default::default() }).unwrap();
/// assert_eq!(g.cells().len(), 1);
/// assert_eq!(g.cells()[0].hours, 3.0);
/// ```
pub fn hotspot_grid(d: &Decoded, o: &HotspotOptions) -> Result<HotspotGrid, SummaryError> {
    Ok(hotspot_grids(d, o, &[1])?.remove(0))
}

/// Build the grid at `cell_km` × each factor in `factors` (e.g. `[1, 2, 4]`), from
/// one accumulation so that coarse grids nest in the fine one.
///
/// # Errors
/// As [`hotspot_grid`]; also [`SummaryError::Option`] for an empty factor list or a
/// zero factor.
pub fn hotspot_grids(
    d: &Decoded,
    o: &HotspotOptions,
    factors: &[u32],
) -> Result<Vec<HotspotGrid>, SummaryError> {
    validate(d, o)?;
    if factors.is_empty() || factors.contains(&0) {
        return Err(SummaryError::option(
            "factors",
            "give one or more positive coarsening factors, e.g. [1, 2, 4]",
        ));
    }
    let (lon0, lat0) = o.centre.unwrap_or_else(|| mean_centre(d));
    let proj = Laea::new(lon0, lat0);
    let acc = accumulate(d, o, &proj);
    Ok(factors
        .iter()
        .map(|&f| build_grid(d, o, &proj, &acc, f))
        .collect())
}

impl HotspotGrid {
    /// Index of the state counted.
    pub fn state(&self) -> usize {
        self.state
    }
    /// Minimum hours in the state for an animal-day to count.
    pub fn min_hours_per_day(&self) -> f64 {
        self.min_hours_per_day
    }
    /// Label of the state counted.
    pub fn state_label(&self) -> &str {
        &self.state_label
    }
    /// Counting method.
    pub fn method(&self) -> CountMethod {
        self.method
    }
    /// Day basis.
    pub fn day_basis(&self) -> DayBasis {
        self.day_basis
    }
    /// Cell edge, km.
    pub fn cell_km(&self) -> f64 {
        self.cell_km
    }
    /// Cell area, km² (exact: the projection is equal-area).
    pub fn cell_area_km2(&self) -> f64 {
        self.cell_km * self.cell_km
    }
    /// Minimum animals per shareable cell.
    pub fn min_animals(&self) -> u32 {
        self.min_animals
    }
    /// The projection the grid is laid in.
    pub fn projection(&self) -> &Laea {
        &self.projection
    }
    /// All cells with at least one qualifying animal-day, including suppressed ones
    /// (for internal checks; do not publish).
    pub fn cells(&self) -> &[HotspotCell] {
        &self.cells
    }
    /// Cells with at least `min_animals` animals: the ones safe to share.
    pub fn shareable_cells(&self) -> impl Iterator<Item = &HotspotCell> {
        self.cells
            .iter()
            .filter(move |c| c.animals >= self.min_animals)
    }
    /// Number of cells left out of shareable outputs.
    pub fn suppressed_count(&self) -> usize {
        self.cells.len() - self.shareable_cells().count()
    }

    /// Write shareable cells as CSV with the polygon as WKT (lon lat order).
    ///
    /// # Errors
    /// [`SummaryError::Io`] when writing fails.
    pub fn write_csv<W: Write>(&self, mut w: W) -> Result<(), SummaryError> {
        let mut out = String::from(
            "state,method,day_basis,cell_km,col,row,animal_days,animals,hours,area_km2,centre_lon,centre_lat,wkt\n",
        );
        for c in self.shareable_cells() {
            let wkt = c
                .polygon
                .iter()
                .map(|&(lon, lat)| format!("{} {}", round7(lon), round7(lat)))
                .collect::<Vec<_>>()
                .join(", ");
            out.push_str(&format!(
                "{},{},{:?},{},{},{},{},{},{},{},{},{},\"POLYGON(({}))\"\n",
                super::csv_text(&self.state_label),
                self.method.as_str(),
                self.day_basis,
                self.cell_km,
                c.col,
                c.row,
                c.animal_days,
                c.animals,
                csv_num(c.hours),
                self.cell_area_km2(),
                round7(c.centre.0),
                round7(c.centre.1),
                wkt
            ));
        }
        w.write_all(out.as_bytes())
            .map_err(SummaryError::io("hotspot CSV"))
    }

    /// Shareable cells as an RFC 7946 GeoJSON FeatureCollection (lon/lat, WGS84,
    /// counter-clockwise outer rings, coordinates rounded to 1e-7°, about 1 cm).
    /// A foreign member `cairn` records the settings and the suppression count.
    pub fn to_geojson(&self) -> serde_json::Value {
        let features: Vec<serde_json::Value> = self
            .shareable_cells()
            .map(|c| {
                let ring: Vec<[f64; 2]> = c
                    .polygon
                    .iter()
                    .map(|&(lon, lat)| [round7(lon), round7(lat)])
                    .collect();
                serde_json::json!({
                    "type": "Feature",
                    "geometry": {"type": "Polygon", "coordinates": [ring]},
                    "properties": {
                        "col": c.col, "row": c.row,
                        "animal_days": c.animal_days, "animals": c.animals,
                        "hours": c.hours, "area_km2": self.cell_area_km2(),
                    }
                })
            })
            .collect();
        serde_json::json!({
            "type": "FeatureCollection",
            "cairn": {
                "state": self.state_label,
                "method": self.method.as_str(),
                "day_basis": format!("{:?}", self.day_basis),
                "cell_km": self.cell_km,
                "min_hours_per_day": self.min_hours_per_day,
                "min_animals": self.min_animals,
                "suppressed_cells": self.suppressed_count(),
                "projection": self.projection.proj_string(),
            },
            "features": features,
        })
    }
}

fn round7(v: f64) -> f64 {
    (v * 1e7).round() / 1e7
}
