//! Hotspot map: the shareable cells of a state-day grid drawn in longitude/latitude,
//! shaded by animal-days, with a scale bar in kilometres, a north arrow, a note of
//! how many cells were suppressed, and optional track lines coloured by state.
//!
//! The map uses plate carrée axes whose aspect is set so that one degree of
//! latitude and one degree of longitude × cos φ₀ (φ₀ the map's centre latitude)
//! have the same length on the page: shapes and the scale bar are true at φ₀.
//! Cell shades are the state's palette colour blended with white in proportion to
//! the cell's animal-days (lightest for 1, full colour for the maximum); the
//! suppressed cells are never drawn.
//!
//! # Formula
//! Length of one degree of longitude at latitude φ on the WGS84 ellipsoid:
//! (π/180) · a cos φ / √(1 − e² sin² φ) (Snyder 1987, *Map Projections — A Working
//! Manual*, USGS PP 1395, eq. 4-21 with the prime-vertical radius 4-20).

use super::style::Scale;
use super::{
    Figure, FigureError, FigureOptions, Painter, colour, de, nice_step, render, swatch_legend,
};
use crate::geo::laea::{WGS84_A, WGS84_F};
use crate::summaries::Decoded;
use crate::summaries::hotspots::HotspotGrid;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Track lines to draw under the grid: per animal, (lon, lat, state) in time order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TrackOverlay {
    /// One polyline per animal.
    pub tracks: Vec<Vec<(f64, f64, usize)>>,
}

impl TrackOverlay {
    /// Tracks from a decoded table, keeping at most `max_points_per_animal` fixes
    /// per animal (evenly spaced in time order, first and last kept) so that maps of
    /// 10^6 fixes stay readable and small.
    pub fn from_decoded(d: &Decoded, max_points_per_animal: usize) -> Self {
        let states: Vec<usize> = d.viterbi().collect();
        let tracks = d
            .animal_rows()
            .iter()
            .map(|r| {
                super::residuals::thin_ranks(r.len(), max_points_per_animal.max(2))
                    .into_iter()
                    .map(|j| {
                        let i = r.start + j;
                        (d.lon()[i], d.lat()[i], states[i])
                    })
                    .collect()
            })
            .collect();
        TrackOverlay { tracks }
    }
}

/// Kilometres per degree of longitude at latitude `lat_deg` (WGS84).
pub fn km_per_degree_lon(lat_deg: f64) -> f64 {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (s, c) = lat_deg.to_radians().sin_cos();
    std::f64::consts::PI / 180.0 * WGS84_A * c / (1.0 - e2 * s * s).sqrt() / 1000.0
}

fn blend(c: RGBColor, a: f64) -> RGBColor {
    let mix = |v: u8| (255.0 * (1.0 - a) + f64::from(v) * a).round() as u8;
    RGBColor(mix(c.0), mix(c.1), mix(c.2))
}

fn shade(c: RGBColor, days: u32, max_days: u32) -> RGBColor {
    let f = if max_days > 1 {
        f64::from(days.saturating_sub(1)) / f64::from(max_days - 1)
    } else {
        1.0
    };
    blend(c, 0.2 + 0.8 * f)
}

struct MapPainter<'a> {
    grid: &'a HotspotGrid,
    tracks: Option<&'a TrackOverlay>,
    state: usize,
    bounds: (f64, f64, f64, f64),
}

impl Painter for MapPainter<'_> {
    fn aspect(&self) -> f64 {
        let (lon0, lon1, lat0, lat1) = self.bounds;
        let mid = 0.5 * (lat0 + lat1);
        let r = (lat1 - lat0) / ((lon1 - lon0) * mid.to_radians().cos());
        (r * 0.8 + 0.2).clamp(0.5, 1.4)
    }

    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let g = self.grid;
        let c = colour(self.state)?;
        let legend_h = k.pt(k.font_pt() * 5.4) as u32;
        let (top, body) = root.split_vertically(legend_h);
        let max_days = g
            .shareable_cells()
            .map(|c| c.animal_days)
            .max()
            .unwrap_or(1);
        let mut entries = Vec::new();
        for v in legend_values(max_days) {
            entries.push((v.to_string(), shade(c, v, max_days)));
        }
        let m = k.margin() as i32;
        let line = k.pt(k.font_pt() * 1.4) as i32;
        top.draw(&Text::new(
            format!(
                "{}: animal-days with ≥ {} h per {} km cell",
                g.state_label(),
                fmt_hours(g.min_hours_per_day()),
                fmt_hours(g.cell_km()),
            ),
            (2 * m, m),
            k.text(0.9),
        ))
        .map_err(de)?;
        top.draw(&Text::new(
            format!(
                "{} cell(s) with < {} animals not shown",
                g.suppressed_count(),
                g.min_animals()
            ),
            (2 * m, m + line),
            k.text(0.9),
        ))
        .map_err(de)?;
        swatch_legend(&top, k, &entries, (2 * m, m + 2 * line + k.px(2.0) as i32))?;

        // Fit the bounds to the plotting area so that the aspect is true at φ₀.
        let (mut lon0, mut lon1, mut lat0, mut lat1) = self.bounds;
        let (w, h) = body.dim_in_pixel();
        let pw = f64::from(w) - f64::from(k.label_area() + 4 * k.margin());
        let ph = f64::from(h) - f64::from(k.x_label_area() + 2 * k.margin());
        let mid = 0.5 * (lat0 + lat1);
        let cosm = mid.to_radians().cos();
        let want = ph / pw; // page height per width
        let have = (lat1 - lat0) / ((lon1 - lon0) * cosm);
        if have < want {
            let extra = ((lon1 - lon0) * cosm * want - (lat1 - lat0)) / 2.0;
            lat0 -= extra;
            lat1 += extra;
        } else {
            let extra = ((lat1 - lat0) / (want * cosm) - (lon1 - lon0)) / 2.0;
            lon0 -= extra;
            lon1 += extra;
        }

        let mut chart = ChartBuilder::on(&body)
            .margin(k.margin())
            .margin_right(3 * k.margin())
            .x_label_area_size(k.x_label_area())
            .y_label_area_size(k.label_area())
            .build_cartesian_2d(lon0..lon1, lat0..lat1)
            .map_err(de)?;
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc("Longitude (°E)")
            .y_desc("Latitude (°N)")
            .label_style(k.text(0.9))
            .axis_desc_style(k.text(1.0))
            .axis_style(BLACK.stroke_width(k.thin()))
            .x_labels(5)
            .y_labels(5)
            .x_label_formatter(&|v| format!("{v:.2}"))
            .y_label_formatter(&|v| format!("{v:.2}"))
            .draw()
            .map_err(de)?;

        if let Some(t) = self.tracks {
            for track in &t.tracks {
                let mut j = 0;
                while j + 1 < track.len() {
                    let s = track[j].2;
                    let mut end = j + 1;
                    while end + 1 < track.len() && track[end].2 == s {
                        end += 1;
                    }
                    let pts: Vec<(f64, f64)> = track[j..=end].iter().map(|p| (p.0, p.1)).collect();
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            pts,
                            colour(s)?.mix(0.8).stroke_width(k.thin()),
                        )))
                        .map_err(de)?;
                    j = end;
                }
            }
        }
        chart
            .draw_series(g.shareable_cells().map(|cell| {
                Polygon::new(
                    cell.polygon.clone(),
                    shade(c, cell.animal_days, max_days).filled(),
                )
            }))
            .map_err(de)?;
        chart
            .draw_series(
                g.shareable_cells()
                    .map(|cell| PathElement::new(cell.polygon.clone(), c.stroke_width(1))),
            )
            .map_err(de)?;

        // Scale bar, lower left, about a quarter of the map width.
        let km_deg = km_per_degree_lon(mid);
        let width_km = (lon1 - lon0) * km_deg;
        let bar_km = nice_step(width_km / 4.0, 1.0);
        let bx = lon0 + 0.06 * (lon1 - lon0);
        let by = lat0 + 0.07 * (lat1 - lat0);
        let bx1 = bx + bar_km / km_deg;
        let tick = 0.015 * (lat1 - lat0);
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(bx, by + tick), (bx, by), (bx1, by), (bx1, by + tick)],
                BLACK.stroke_width(k.line()),
            )))
            .map_err(de)?;
        let (px, py) = chart.backend_coord(&(0.5 * (bx + bx1), by + tick));
        root.draw(&Text::new(
            format!("{} km", fmt_hours(bar_km)),
            (px, py - k.px(1.0) as i32),
            k.text(0.9).pos(Pos::new(HPos::Center, VPos::Bottom)),
        ))
        .map_err(de)?;

        // North arrow, upper right: the axes are north-up, so the arrow is vertical.
        let (ax, ay) =
            chart.backend_coord(&(lon1 - 0.07 * (lon1 - lon0), lat1 - 0.06 * (lat1 - lat0)));
        let len = k.px(14.0) as i32;
        let half = k.px(3.5) as i32;
        root.draw(&Polygon::new(
            vec![
                (ax, ay),
                (ax - half, ay + half * 2),
                (ax + half, ay + half * 2),
            ],
            BLACK.filled(),
        ))
        .map_err(de)?;
        root.draw(&PathElement::new(
            vec![(ax, ay + half * 2), (ax, ay + len)],
            BLACK.stroke_width(k.line()),
        ))
        .map_err(de)?;
        root.draw(&Text::new(
            "N".to_string(),
            (ax, ay + len + k.px(1.0) as i32),
            k.text(1.0).pos(Pos::new(HPos::Center, VPos::Top)),
        ))
        .map_err(de)?;
        Ok(())
    }
}

/// Short number formatting: integers without decimals.
fn fmt_hours(v: f64) -> String {
    if (v - v.round()).abs() < 1e-9 {
        format!("{}", v.round())
    } else {
        format!("{v}")
    }
}

/// Up to five legend values from 1 to `max` (distinct, increasing).
fn legend_values(max: u32) -> Vec<u32> {
    let mut v: Vec<u32> = (0..5)
        .map(|i| 1 + ((f64::from(max - 1) * f64::from(i) / 4.0).round() as u32))
        .collect();
    v.dedup();
    v
}

/// Map of the shareable cells of `grid` (coloured by the grid's state), optionally
/// over tracks.
///
/// # Errors
/// [`FigureError::Input`] when there is nothing to draw (every cell suppressed and
/// no tracks); [`FigureError::TooManyStates`] for a state without a colour.
pub fn hotspot_map(
    grid: &HotspotGrid,
    tracks: Option<&TrackOverlay>,
    o: &FigureOptions,
) -> Result<Figure, FigureError> {
    let state = grid.state();
    colour(state)?;
    let mut lon = (f64::INFINITY, f64::NEG_INFINITY);
    let mut lat = (f64::INFINITY, f64::NEG_INFINITY);
    let mut add = |x: f64, y: f64| {
        lon = (lon.0.min(x), lon.1.max(x));
        lat = (lat.0.min(y), lat.1.max(y));
    };
    for c in grid.shareable_cells() {
        for &(x, y) in &c.polygon {
            add(x, y);
        }
    }
    if let Some(t) = tracks {
        for tr in &t.tracks {
            for &(x, y, s) in tr {
                colour(s)?;
                add(x, y);
            }
        }
    }
    if !lon.0.is_finite() {
        return Err(FigureError::input(
            "grid",
            "nothing to map: every cell is suppressed and no tracks were given",
        ));
    }
    // Pad by 5 % (at least ~1 km) so cells do not touch the frame.
    let pad_lon = ((lon.1 - lon.0) * 0.05).max(0.01);
    let pad_lat = ((lat.1 - lat.0) * 0.05).max(0.01);
    let bounds = (
        lon.0 - pad_lon,
        lon.1 + pad_lon,
        lat.0 - pad_lat,
        lat.1 + pad_lat,
    );
    render(
        &MapPainter {
            grid,
            tracks,
            state,
            bounds,
        },
        o,
    )
}
