//! Occupancy and transition-probability curves: a mean curve per state with its
//! interval drawn as a translucent ribbon, over a covariate grid.
//!
//! The curves and their intervals are computed by the model code (e.g. by the delta
//! method or by simulation from the estimates' covariance); this module only draws
//! them. Several panels can share one figure (e.g. one per row of the transition
//! matrix), laid out in a fixed number of columns.

use super::style::Scale;
use super::{Figure, FigureError, FigureOptions, Painter, colour, de, render, swatch_legend, tick};
use plotters::coord::Shift;
use plotters::prelude::*;

/// One curve with its interval.
#[derive(Debug, Clone, PartialEq)]
pub struct IntervalSeries {
    /// State index (selects the colour).
    pub state: usize,
    /// Legend label.
    pub label: String,
    /// Point estimate at each x.
    pub mean: Vec<f64>,
    /// Lower interval bound at each x.
    pub lower: Vec<f64>,
    /// Upper interval bound at each x.
    pub upper: Vec<f64>,
}

/// One panel of curves over a common x grid.
#[derive(Debug, Clone, PartialEq)]
pub struct CurvePanel {
    /// Panel title (e.g. "from rest"); empty for none.
    pub title: String,
    /// x-axis label with units, e.g. "Distance to coast (km)".
    pub x_label: String,
    /// y-axis label, e.g. "Probability of state".
    pub y_label: String,
    /// x grid (increasing).
    pub x: Vec<f64>,
    /// Curves.
    pub series: Vec<IntervalSeries>,
    /// y-axis range; `None`: [0, 1] (probabilities).
    pub y_range: Option<(f64, f64)>,
}

struct Curves<'a> {
    panels: &'a [CurvePanel],
    columns: usize,
}

fn check(p: &CurvePanel) -> Result<(), FigureError> {
    if p.x.len() < 2 {
        return Err(FigureError::input("x", "need at least two grid points"));
    }
    if !p.x.windows(2).all(|w| w[1] > w[0]) {
        return Err(FigureError::input("x", "grid must be strictly increasing"));
    }
    for s in &p.series {
        colour(s.state)?;
        if s.mean.len() != p.x.len() || s.lower.len() != p.x.len() || s.upper.len() != p.x.len() {
            return Err(FigureError::input(
                "series",
                format!("`{}`: mean, lower and upper need one value per x", s.label),
            ));
        }
    }
    Ok(())
}

impl Painter for Curves<'_> {
    fn aspect(&self) -> f64 {
        let rows = self.panels.len().div_ceil(self.columns);
        0.75 * rows as f64 / self.columns as f64 + 0.08
    }

    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let legend_h = k.pt(k.font_pt() * 2.2) as u32;
        let (top, body) = root.split_vertically(legend_h);
        // Legend: one entry per distinct state label, in first-seen order.
        let mut entries: Vec<(String, RGBColor)> = Vec::new();
        for p in self.panels {
            for s in &p.series {
                if !entries.iter().any(|(l, _)| *l == s.label) {
                    entries.push((s.label.clone(), colour(s.state)?));
                }
            }
        }
        swatch_legend(
            &top,
            k,
            &entries,
            (k.margin() as i32 * 2, k.margin() as i32),
        )?;
        let rows = self.panels.len().div_ceil(self.columns);
        let areas = body.split_evenly((rows, self.columns));
        for (p, area) in self.panels.iter().zip(areas.iter()) {
            let (y0, y1) = p.y_range.unwrap_or((0.0, 1.0));
            let mut b = ChartBuilder::on(area);
            b.margin(k.margin())
                .margin_right(3 * k.margin())
                .x_label_area_size(k.x_label_area())
                .y_label_area_size(k.label_area());
            if !p.title.is_empty() {
                b.caption(&p.title, k.text(1.0));
            }
            let x0 = p.x[0];
            let x1 = p.x[p.x.len() - 1];
            let mut chart = b.build_cartesian_2d(x0..x1, y0..y1).map_err(de)?;
            chart
                .configure_mesh()
                .disable_mesh()
                .x_desc(&p.x_label)
                .y_desc(&p.y_label)
                .label_style(k.text(0.9))
                .axis_desc_style(k.text(1.0))
                .axis_style(BLACK.stroke_width(k.thin()))
                .x_labels(6)
                .x_label_formatter(&tick)
                .y_labels(6)
                .y_label_formatter(&tick)
                .draw()
                .map_err(de)?;
            for s in &p.series {
                let c = colour(s.state)?;
                let ribbon: Vec<(f64, f64)> =
                    p.x.iter()
                        .zip(&s.upper)
                        .map(|(&x, &u)| (x, u))
                        .chain(p.x.iter().zip(&s.lower).rev().map(|(&x, &l)| (x, l)))
                        .filter(|(_, y)| y.is_finite())
                        .collect();
                chart
                    .draw_series(std::iter::once(Polygon::new(ribbon, c.mix(0.25).filled())))
                    .map_err(de)?;
                chart
                    .draw_series(LineSeries::new(
                        p.x.iter()
                            .zip(&s.mean)
                            .filter(|(_, y)| y.is_finite())
                            .map(|(&x, &y)| (x, y)),
                        c.stroke_width(k.line()),
                    ))
                    .map_err(de)?;
            }
        }
        Ok(())
    }
}

/// Draw curves with interval ribbons, one panel per entry of `panels`, laid out in
/// `columns` columns.
///
/// # Errors
/// [`FigureError::Input`] for an x grid that is too short or not increasing, or
/// series whose lengths do not match it; [`FigureError::TooManyStates`] for a state
/// index without a palette colour.
pub fn interval_curves(
    panels: &[CurvePanel],
    columns: usize,
    o: &FigureOptions,
) -> Result<Figure, FigureError> {
    if panels.is_empty() || columns == 0 {
        return Err(FigureError::input(
            "panels",
            "need at least one panel and one column",
        ));
    }
    for p in panels {
        check(p)?;
    }
    render(&Curves { panels, columns }, o)
}
