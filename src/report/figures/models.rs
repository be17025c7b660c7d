//! Model-comparison figure: ΔAIC of each candidate model relative to the best.
//!
//! Candidates are sorted by ΔAIC (ties by name, so the order is deterministic); a
//! thin reference line at ΔAIC = 2 marks the usual "substantial support" bound.
//!
//! # Formula
//! ΔAIC_i = AIC_i − min_j AIC_j; support bands: Burnham, K. P. & Anderson, D. R.
//! (2002), *Model Selection and Multimodel Inference*, 2nd ed., Springer, §2.6.

use super::palette::{GREY, LIGHT_GREY};
use super::style::Scale;
use super::{Figure, FigureError, FigureOptions, Painter, colour, de, render, tick};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// One candidate model's score.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelScore {
    /// Candidate name (e.g. "3 states, sst + depth").
    pub name: String,
    /// Akaike information criterion.
    pub aic: f64,
}

struct Comparison {
    rows: Vec<(String, f64)>,
}

impl Painter for Comparison {
    fn aspect(&self) -> f64 {
        (0.18 + 0.07 * self.rows.len() as f64).min(1.4)
    }
    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let n = self.rows.len();
        let label_style = k.text(0.9);
        let mut widest = 0u32;
        for (name, _) in &self.rows {
            widest = widest.max(root.estimate_text_size(name, &label_style).map_err(de)?.0);
        }
        let max_d = self.rows.iter().map(|r| r.1).fold(0.0, f64::max);
        let x1 = (max_d * 1.08).max(4.0);
        let mut chart = ChartBuilder::on(root)
            .margin(k.margin())
            .margin_right(3 * k.margin())
            .x_label_area_size(k.x_label_area())
            .y_label_area_size(widest + k.px(6.0))
            .build_cartesian_2d(0.0..x1, 0.0..n as f64)
            .map_err(de)?;
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc("ΔAIC (relative to best model)")
            .label_style(k.text(0.9))
            .axis_desc_style(k.text(1.0))
            .axis_style(BLACK.stroke_width(k.thin()))
            .x_labels(6)
            .x_label_formatter(&tick)
            .y_labels(0)
            .draw()
            .map_err(de)?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(2.0, 0.0), (2.0, n as f64)],
                GREY.stroke_width(k.thin()),
            )))
            .map_err(de)?;
        let best = colour(0)?;
        // Best model at the top: row i is drawn at y = n − i − 0.5.
        for (i, (name, d)) in self.rows.iter().enumerate() {
            let y = (n - i) as f64 - 0.5;
            let fill = if *d == 0.0 { best } else { LIGHT_GREY };
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(0.0, y - 0.3), (*d, y + 0.3)],
                    fill.filled(),
                )))
                .map_err(de)?;
            chart
                .draw_series(std::iter::once(Circle::new(
                    (*d, y),
                    k.px(2.0),
                    BLACK.filled(),
                )))
                .map_err(de)?;
            let (px, py) = chart.backend_coord(&(0.0, y));
            root.draw(&Text::new(
                name.clone(),
                (px - k.px(3.0) as i32, py),
                label_style.clone().pos(Pos::new(HPos::Right, VPos::Center)),
            ))
            .map_err(de)?;
            let (vx, vy) = chart.backend_coord(&(*d, y));
            root.draw(&Text::new(
                format!("{d:.1}"),
                (vx + k.px(4.0) as i32, vy),
                k.text(0.8).pos(Pos::new(HPos::Left, VPos::Center)),
            ))
            .map_err(de)?;
        }
        Ok(())
    }
}

/// ΔAIC per candidate, best model on top and highlighted.
///
/// # Errors
/// [`FigureError::Input`] for no candidates or a non-finite AIC (a model that did
/// not converge has no AIC to compare; leave it out and list it in the report).
///
/// # Formula
/// ΔAIC_i = AIC_i − min_j AIC_j (Burnham & Anderson 2002).
pub fn model_comparison(scores: &[ModelScore], o: &FigureOptions) -> Result<Figure, FigureError> {
    if scores.is_empty() {
        return Err(FigureError::input("scores", "no candidate models"));
    }
    if let Some(s) = scores.iter().find(|s| !s.aic.is_finite()) {
        return Err(FigureError::input(
            "scores",
            format!(
                "`{}` has AIC {}; leave unconverged models out",
                s.name, s.aic
            ),
        ));
    }
    let min = scores.iter().map(|s| s.aic).fold(f64::INFINITY, f64::min);
    let mut rows: Vec<(String, f64)> = scores
        .iter()
        .map(|s| (s.name.clone(), s.aic - min))
        .collect();
    rows.sort_by(|a, b| a.1.total_cmp(&b.1).then_with(|| a.0.cmp(&b.0)));
    render(&Comparison { rows }, o)
}
