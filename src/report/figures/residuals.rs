//! Residual diagnostics figure: per data stream, a normal QQ plot of the
//! pseudo-residuals (left) and their autocorrelation function (right).
//!
//! For long series the QQ panel draws at most [`QQ_MAX_POINTS`] points, chosen
//! evenly in rank and always keeping both tails' extremes, so the SVG stays small
//! while the shape, including the tails, is unchanged. The ACF panel shades the
//! approximate 95 % band ±1.96/√n for white noise.
//!
//! # Formula
//! White-noise band for the sample ACF: ±z_{0.975}/√n (Box, Jenkins & Reinsel 2008,
//! *Time Series Analysis*, 4th ed., §2.1.6, large-lag standard error under
//! independence).

use super::palette::{GREY, LIGHT_GREY};
use super::style::Scale;
use super::{Figure, FigureError, FigureOptions, Painter, colour, de, render, tick};
use crate::summaries::diagnostics::StreamDiagnostics;
use plotters::coord::Shift;
use plotters::prelude::*;

/// Most points drawn in one QQ panel.
pub const QQ_MAX_POINTS: usize = 2000;

/// Ranks to draw: all if few, otherwise evenly spaced including first and last.
pub(crate) fn thin_ranks(n: usize, max: usize) -> Vec<usize> {
    if n <= max {
        return (0..n).collect();
    }
    (0..max)
        .map(|j| ((j as f64) * (n - 1) as f64 / (max - 1) as f64).round() as usize)
        .collect()
}

struct Residuals<'a> {
    streams: &'a [StreamDiagnostics],
}

impl Painter for Residuals<'_> {
    fn aspect(&self) -> f64 {
        0.45 * self.streams.len() as f64
    }
    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let areas = root.split_evenly((self.streams.len(), 2));
        let c = colour(0)?;
        for (i, s) in self.streams.iter().enumerate() {
            let qa = &areas[2 * i];
            let aa = &areas[2 * i + 1];
            // QQ panel, symmetric limits so the 1:1 line is the diagonal.
            let lim =
                s.qq.theoretical
                    .iter()
                    .chain(&s.qq.sample)
                    .fold(0.0f64, |m, v| m.max(v.abs()))
                    .max(1.0)
                    * 1.05;
            let mut chart = ChartBuilder::on(qa)
                .margin(k.margin())
                .margin_right(3 * k.margin())
                .caption(format!("{}: normal QQ", s.stream), k.text(1.0))
                .x_label_area_size(k.x_label_area())
                .y_label_area_size(k.label_area())
                .build_cartesian_2d(-lim..lim, -lim..lim)
                .map_err(de)?;
            chart
                .configure_mesh()
                .disable_mesh()
                .x_desc("Theoretical quantile (standard normal)")
                .y_desc("Pseudo-residual")
                .label_style(k.text(0.9))
                .axis_desc_style(k.text(1.0))
                .axis_style(BLACK.stroke_width(k.thin()))
                .x_labels(5)
                .x_label_formatter(&tick)
                .y_labels(5)
                .y_label_formatter(&tick)
                .draw()
                .map_err(de)?;
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(-lim, -lim), (lim, lim)],
                    GREY.stroke_width(k.thin()),
                )))
                .map_err(de)?;
            let ranks = thin_ranks(s.qq.sample.len(), QQ_MAX_POINTS);
            chart
                .draw_series(ranks.iter().map(|&r| {
                    Circle::new((s.qq.theoretical[r], s.qq.sample[r]), k.px(1.0), c.filled())
                }))
                .map_err(de)?;

            // ACF panel.
            let max_lag = s.acf.len().saturating_sub(1).max(1) as f64;
            let band = 1.959_963_984_540_054 / (s.n as f64).sqrt();
            let ymin = s.acf.iter().fold(-band, |m, &v| m.min(v)).min(-0.1) * 1.1;
            let mut chart = ChartBuilder::on(aa)
                .margin(k.margin())
                .margin_right(3 * k.margin())
                .caption(format!("{}: autocorrelation", s.stream), k.text(1.0))
                .x_label_area_size(k.x_label_area())
                .y_label_area_size(k.label_area())
                .build_cartesian_2d(-0.5..max_lag + 0.5, ymin..1.05)
                .map_err(de)?;
            chart
                .configure_mesh()
                .disable_mesh()
                .x_desc("Lag (steps)")
                .y_desc("Autocorrelation")
                .label_style(k.text(0.9))
                .axis_desc_style(k.text(1.0))
                .axis_style(BLACK.stroke_width(k.thin()))
                .x_labels(6)
                .x_label_formatter(&tick)
                .y_labels(5)
                .y_label_formatter(&tick)
                .draw()
                .map_err(de)?;
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(-0.5, -band), (max_lag + 0.5, band)],
                    LIGHT_GREY.mix(0.6).filled(),
                )))
                .map_err(de)?;
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(-0.5, 0.0), (max_lag + 0.5, 0.0)],
                    GREY.stroke_width(k.thin()),
                )))
                .map_err(de)?;
            chart
                .draw_series(s.acf.iter().enumerate().map(|(lag, &r)| {
                    PathElement::new(
                        vec![(lag as f64, 0.0), (lag as f64, r)],
                        c.stroke_width(k.line()),
                    )
                }))
                .map_err(de)?;
        }
        Ok(())
    }
}

/// QQ plot and ACF plot for each stream (one row per stream).
///
/// # Errors
/// [`FigureError::Input`] for no streams, or a stream with empty QQ data or ACF.
pub fn residual_diagnostics(
    streams: &[StreamDiagnostics],
    o: &FigureOptions,
) -> Result<Figure, FigureError> {
    if streams.is_empty() {
        return Err(FigureError::input("streams", "no residual streams"));
    }
    for s in streams {
        if s.qq.sample.is_empty() || s.acf.is_empty() || s.qq.sample.len() != s.qq.theoretical.len()
        {
            return Err(FigureError::input(
                "streams",
                format!("stream `{}` has no QQ data or no ACF", s.stream),
            ));
        }
    }
    render(&Residuals { streams }, o)
}
