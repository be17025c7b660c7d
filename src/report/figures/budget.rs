//! Activity-budget figures: stacked shares of time per state by local hour (with a
//! night mask) and by diel phase or season.
//!
//! The night mask is a grey band above the hourly bars whose height is the fraction
//! of that hour's fixes with the sun below the night threshold, as measured from the
//! fixes by [`crate::summaries::budgets`]; at high latitudes or across seasons it
//! is therefore partial, not a block of fixed clock hours.

use super::palette::GREY;
use super::style::Scale;
use super::{Figure, FigureError, FigureOptions, Painter, colour, de, render, swatch_legend};
use crate::summaries::CountMethod;
use crate::summaries::budgets::{ActivityBudgets, BudgetTable, Grouping};
use plotters::coord::Shift;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Height of the night band when every fix of the hour is at night, in share units.
const NIGHT_BAND: f64 = 0.12;
/// Gap between the bars and the night band, in share units.
const NIGHT_GAP: f64 = 0.02;

/// y-axis title naming how time in a state was counted.
fn method_desc(t: &BudgetTable) -> &'static str {
    match t.method {
        CountMethod::Viterbi => "Proportion of time (Viterbi)",
        CountMethod::LocalProbabilities => "Proportion of time (state prob.)",
    }
}

fn legend_entries(t: &BudgetTable) -> Result<Vec<(String, RGBColor)>, FigureError> {
    t.state_labels
        .iter()
        .enumerate()
        .map(|(s, l)| Ok((l.clone(), colour(s)?)))
        .collect()
}

/// Draw stacked bars for rows of `t` at x positions 0.., width `w`.
fn stacked_bars<DB: DrawingBackend>(
    chart: &mut ChartContext<'_, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    t: &BudgetTable,
    x_of: impl Fn(usize) -> f64,
    w: f64,
) -> Result<(), FigureError> {
    for (i, r) in t.rows.iter().enumerate() {
        if !r.proportion.iter().all(|p| p.is_finite()) {
            continue;
        }
        let x = x_of(i);
        let mut base = 0.0;
        for (s, p) in r.proportion.iter().enumerate() {
            let c = colour(s)?;
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x - w / 2.0, base), (x + w / 2.0, base + p)],
                    c.filled(),
                )))
                .map_err(de)?;
            base += p;
        }
    }
    Ok(())
}

struct Hourly<'a> {
    b: &'a ActivityBudgets,
}

impl Painter for Hourly<'_> {
    fn aspect(&self) -> f64 {
        0.62
    }
    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let t = &self.b.hourly;
        let legend_h = k.pt(k.font_pt() * 2.2) as u32;
        let (top, body) = root.split_vertically(legend_h);
        let mut entries = legend_entries(t)?;
        entries.push((
            format!(
                "share of fixes at night (sun < {}°)",
                self.b.night_elevation_deg
            ),
            GREY,
        ));
        swatch_legend(
            &top,
            k,
            &entries,
            (k.margin() as i32 * 2, k.margin() as i32),
        )?;
        let top_y = 1.0 + NIGHT_GAP + NIGHT_BAND;
        let mut chart = ChartBuilder::on(&body)
            .margin(k.margin())
            .margin_right(3 * k.margin())
            .x_label_area_size(k.x_label_area())
            .y_label_area_size(k.label_area())
            .build_cartesian_2d(0.0..24.0, 0.0..top_y)
            .map_err(de)?;
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc("Local hour (h)")
            .y_desc(method_desc(t))
            .label_style(k.text(0.9))
            .axis_desc_style(k.text(1.0))
            .axis_style(BLACK.stroke_width(k.thin()))
            .x_labels(9)
            .y_labels(7)
            .x_label_formatter(&|v| format!("{:.0}", v))
            // The band above 1 is the night mask, not a share: no tick labels there.
            .y_label_formatter(&|v| {
                if *v <= 1.0 + 1e-9 {
                    format!("{:.1}", v)
                } else {
                    String::new()
                }
            })
            .draw()
            .map_err(de)?;
        stacked_bars(&mut chart, t, |h| h as f64 + 0.5, 0.86)?;
        for (h, r) in t.rows.iter().enumerate() {
            let nf = r.night_fraction.unwrap_or(f64::NAN);
            if nf.is_finite() && nf > 0.0 {
                let y0 = 1.0 + NIGHT_GAP;
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(h as f64, y0), (h as f64 + 1.0, y0 + NIGHT_BAND * nf)],
                        GREY.filled(),
                    )))
                    .map_err(de)?;
            }
        }
        Ok(())
    }
}

/// Hourly activity budget: stacked shares per local hour with the night mask.
///
/// # Errors
/// [`FigureError::TooManyStates`] for more than eight states.
pub fn hourly_budget(b: &ActivityBudgets, o: &FigureOptions) -> Result<Figure, FigureError> {
    if b.hourly.grouping != Grouping::LocalHour || b.hourly.rows.len() != 24 {
        return Err(FigureError::input(
            "hourly",
            "expected the 24-row local-hour table",
        ));
    }
    legend_entries(&b.hourly)?;
    render(&Hourly { b }, o)
}

struct Grouped<'a> {
    tables: &'a [&'a BudgetTable],
}

impl Painter for Grouped<'_> {
    fn aspect(&self) -> f64 {
        0.62
    }
    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &Scale,
    ) -> Result<(), FigureError> {
        let legend_h = k.pt(k.font_pt() * 2.2) as u32;
        let (top, body) = root.split_vertically(legend_h);
        swatch_legend(
            &top,
            k,
            &legend_entries(self.tables[0])?,
            (k.margin() as i32 * 2, k.margin() as i32),
        )?;
        let areas = body.split_evenly((1, self.tables.len()));
        for (t, area) in self.tables.iter().zip(areas.iter()) {
            let n = t.rows.len();
            let labels: Vec<String> = t.rows.iter().map(|r| r.group.clone()).collect();
            let mut chart = ChartBuilder::on(area)
                .margin(k.margin())
                .margin_right(3 * k.margin())
                .x_label_area_size(k.x_label_area())
                .y_label_area_size(k.label_area())
                .build_cartesian_2d(0.0..n as f64, 0.0..1.0)
                .map_err(de)?;
            let x_desc = match t.grouping {
                Grouping::DielPhase => "Diel phase",
                Grouping::Season => "Season",
                Grouping::LocalHour => "Local hour (h)",
            };
            chart
                .configure_mesh()
                .disable_mesh()
                .x_desc(x_desc)
                .y_desc(method_desc(t))
                .label_style(k.text(0.9))
                .axis_desc_style(k.text(1.0))
                .axis_style(BLACK.stroke_width(k.thin()))
                // Categories are named under their bars below, not at numeric ticks.
                .x_labels(0)
                .y_labels(6)
                .y_label_formatter(&|v| format!("{:.1}", v))
                .draw()
                .map_err(de)?;
            category_labels(root, &chart, k, &labels)?;
            stacked_bars(&mut chart, t, |i| i as f64 + 0.5, 0.7)?;
        }
        Ok(())
    }
}

/// Write category names centred under bars at x = i + 0.5, on the root area (whose
/// coordinates are the backend's pixels, as returned by `backend_coord`).
pub(crate) fn category_labels<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &ChartContext<'_, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    k: &Scale,
    labels: &[String],
) -> Result<(), FigureError> {
    let style = k.text(0.9).pos(Pos::new(HPos::Center, VPos::Top));
    for (i, l) in labels.iter().enumerate() {
        let (px, py) = chart.backend_coord(&(i as f64 + 0.5, 0.0));
        root.draw(&Text::new(
            l.clone(),
            (px, py + k.px(2.0) as i32),
            style.clone(),
        ))
        .map_err(de)?;
    }
    Ok(())
}

/// Stacked shares by diel phase and/or season, one panel per table, side by side.
///
/// # Errors
/// [`FigureError::Input`] when no table is given, a table is hourly, or the tables
/// have different states; [`FigureError::TooManyStates`] for more than eight states.
pub fn grouped_budget(tables: &[&BudgetTable], o: &FigureOptions) -> Result<Figure, FigureError> {
    if tables.is_empty() {
        return Err(FigureError::input(
            "tables",
            "give the diel and/or season table",
        ));
    }
    for t in tables {
        if t.grouping == Grouping::LocalHour {
            return Err(FigureError::input(
                "tables",
                "use hourly_budget for the hourly table",
            ));
        }
        if t.state_labels != tables[0].state_labels {
            return Err(FigureError::input(
                "tables",
                "tables have different state labels",
            ));
        }
        if t.rows.is_empty() {
            return Err(FigureError::input("tables", "a table has no rows"));
        }
    }
    legend_entries(tables[0])?;
    render(&Grouped { tables }, o)
}
