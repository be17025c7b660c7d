//! Observed distributions with fitted state densities: a density-scaled histogram
//! (e.g. of step lengths or turning angles) with one curve per state and, optionally,
//! their sum.
//!
//! The state curves are supplied by the model code on an x grid, already weighted by
//! the states' overall shares (so that their sum is the fitted marginal density and
//! is comparable with the histogram); this module only draws them.
//!
//! # Formula
//! Histogram height of bin j: c_j / (n · w), with c_j the count in the bin, n the
//! number of finite observations inside the range and w the bin width, so the bars
//! integrate to one like the densities.

use super::palette::GREY;
use super::style::Scale;
use super::{Figure, FigureError, FigureOptions, Painter, colour, de, render, swatch_legend, tick};
use plotters::coord::Shift;
use plotters::prelude::*;

/// One state's fitted density on the panel's x grid.
#[derive(Debug, Clone, PartialEq)]
pub struct DensityCurve {
    /// State index (selects the colour).
    pub state: usize,
    /// Legend label.
    pub label: String,
    /// Density at each x (weighted by the state's share).
    pub y: Vec<f64>,
}

/// One histogram panel.
#[derive(Debug, Clone, PartialEq)]
pub struct DistributionPanel {
    /// x-axis label with units, e.g. "Step length (m)".
    pub x_label: String,
    /// Observed values (non-finite values are ignored).
    pub observed: Vec<f64>,
    /// Number of histogram bins.
    pub bins: usize,
    /// Histogram and axis range.
    pub range: (f64, f64),
    /// x grid of the densities.
    pub x: Vec<f64>,
    /// Per-state densities.
    pub densities: Vec<DensityCurve>,
    /// Also draw the sum of the state densities.
    pub show_total: bool,
}

/// Density-scaled histogram heights.
pub(crate) fn histogram(values: &[f64], bins: usize, (lo, hi): (f64, f64)) -> Vec<f64> {
    let w = (hi - lo) / bins as f64;
    let mut counts = vec![0u64; bins];
    let mut n = 0u64;
    for &v in values {
        if v.is_finite() && v >= lo && v <= hi {
            let b = (((v - lo) / w) as usize).min(bins - 1);
            counts[b] += 1;
            n += 1;
        }
    }
    counts
        .iter()
        .map(|&c| {
            if n > 0 {
                c as f64 / (n as f64 * w)
            } else {
                0.0
            }
        })
        .collect()
}

struct Distributions<'a> {
    panels: &'a [DistributionPanel],
}

impl Painter for Distributions<'_> {
    fn aspect(&self) -> f64 {
        0.5 + 0.08
    }
    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let legend_h = k.pt(k.font_pt() * 2.2) as u32;
        let (top, body) = root.split_vertically(legend_h);
        let mut entries: Vec<(String, RGBColor)> = Vec::new();
        for p in self.panels {
            for d in &p.densities {
                if !entries.iter().any(|(l, _)| *l == d.label) {
                    entries.push((d.label.clone(), colour(d.state)?));
                }
            }
        }
        if self.panels.iter().any(|p| p.show_total) {
            entries.push(("all states".to_string(), RGBColor(0, 0, 0)));
        }
        swatch_legend(
            &top,
            k,
            &entries,
            (k.margin() as i32 * 2, k.margin() as i32),
        )?;
        let areas = body.split_evenly((1, self.panels.len()));
        for (p, area) in self.panels.iter().zip(areas.iter()) {
            let h = histogram(&p.observed, p.bins, p.range);
            let total: Vec<f64> = (0..p.x.len())
                .map(|i| p.densities.iter().map(|d| d.y[i]).sum())
                .collect();
            let ymax = h
                .iter()
                .chain(p.densities.iter().flat_map(|d| d.y.iter()))
                .chain(total.iter().filter(|_| p.show_total))
                .filter(|v| v.is_finite())
                .fold(0.0f64, |m, &v| m.max(v));
            let ymax = if ymax > 0.0 { ymax * 1.05 } else { 1.0 };
            let mut chart = ChartBuilder::on(area)
                .margin(k.margin())
                .margin_right(3 * k.margin())
                .x_label_area_size(k.x_label_area())
                .y_label_area_size(k.label_area() + k.px(6.0))
                .build_cartesian_2d(p.range.0..p.range.1, 0.0..ymax)
                .map_err(de)?;
            chart
                .configure_mesh()
                .disable_mesh()
                .x_desc(&p.x_label)
                .y_desc("Density")
                .label_style(k.text(0.9))
                .axis_desc_style(k.text(1.0))
                .axis_style(BLACK.stroke_width(k.thin()))
                .x_labels(6)
                .x_label_formatter(&tick)
                .y_labels(5)
                .y_label_formatter(&tick)
                .draw()
                .map_err(de)?;
            let w = (p.range.1 - p.range.0) / p.bins as f64;
            chart
                .draw_series(h.iter().enumerate().map(|(j, &y)| {
                    let x0 = p.range.0 + j as f64 * w;
                    Rectangle::new([(x0, 0.0), (x0 + w, y)], GREY.mix(0.45).filled())
                }))
                .map_err(de)?;
            for d in &p.densities {
                let c = colour(d.state)?;
                chart
                    .draw_series(LineSeries::new(
                        p.x.iter()
                            .zip(&d.y)
                            .filter(|(_, y)| y.is_finite())
                            .map(|(&x, &y)| (x, y)),
                        c.stroke_width(k.line()),
                    ))
                    .map_err(de)?;
            }
            if p.show_total {
                chart
                    .draw_series(LineSeries::new(
                        p.x.iter()
                            .zip(&total)
                            .filter(|(_, y)| y.is_finite())
                            .map(|(&x, &y)| (x, y)),
                        BLACK.stroke_width(k.line()),
                    ))
                    .map_err(de)?;
            }
        }
        Ok(())
    }
}

/// Histograms with fitted per-state densities, panels side by side (e.g. step
/// length and turning angle).
///
/// # Errors
/// [`FigureError::Input`] for no panels, zero bins, an empty or reversed range, or
/// density curves whose length differs from the x grid;
/// [`FigureError::TooManyStates`] for a state without a palette colour.
pub fn fitted_distributions(
    panels: &[DistributionPanel],
    o: &FigureOptions,
) -> Result<Figure, FigureError> {
    if panels.is_empty() {
        return Err(FigureError::input("panels", "no panels"));
    }
    for p in panels {
        if p.bins == 0 {
            return Err(FigureError::input("bins", "need at least one bin"));
        }
        if !(p.range.0.is_finite() && p.range.1.is_finite() && p.range.1 > p.range.0) {
            return Err(FigureError::input(
                "range",
                format!(
                    "({}, {}) is not an increasing finite range",
                    p.range.0, p.range.1
                ),
            ));
        }
        for d in &p.densities {
            colour(d.state)?;
            if d.y.len() != p.x.len() {
                return Err(FigureError::input(
                    "densities",
                    format!(
                        "`{}` has {} values for {} x points",
                        d.label,
                        d.y.len(),
                        p.x.len()
                    ),
                ));
            }
        }
    }
    render(&Distributions { panels }, o)
}
