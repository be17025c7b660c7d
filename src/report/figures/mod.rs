//! Publication figures drawn with plotters: each figure is rendered once as SVG and
//! once as PNG from the same drawing code, sized for a journal column.
//!
//! Every figure kind is a function taking plain data (tables from
//! [`crate::summaries`], or curves computed elsewhere) and [`FigureOptions`], and
//! returning a [`Figure`] holding both encodings. States are coloured from the
//! Okabe–Ito palette ([`palette`]) by state index, identically in every figure.
//! Output is deterministic: the same input gives byte-identical SVG (no timestamps,
//! no hash-ordered iteration, fixed font), and the PNG carries its resolution in a
//! `pHYs` chunk so that layout programs place it at the intended physical size.
//!
//! Figure kinds: [`curves::interval_curves`] (occupancy or transition-probability
//! curves with interval ribbons), [`budget::hourly_budget`] (stacked shares by local
//! hour with a night mask), [`budget::grouped_budget`] (stacked shares by diel phase
//! and season), [`map::hotspot_map`] (state-day grid with scale bar, north arrow and
//! optional tracks), [`models::model_comparison`] (ΔAIC per candidate),
//! [`residuals::residual_diagnostics`] (QQ and ACF per stream) and
//! [`distributions::fitted_distributions`] (histograms with per-state densities).

pub mod budget;
pub mod curves;
pub mod distributions;
pub mod map;
pub mod models;
pub mod palette;
pub mod residuals;
pub mod style;

pub use style::{FigureOptions, FigureWidth};

use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::{Path, PathBuf};

/// Errors raised while drawing or writing a figure.
#[derive(Debug, thiserror::Error)]
pub enum FigureError {
    /// Input data cannot be drawn as given.
    #[error("figure input `{what}`: {problem}")]
    Input {
        /// Which input.
        what: &'static str,
        /// What is wrong and what to do.
        problem: String,
    },
    /// More states than distinct palette colours.
    #[error(
        "{0} states, but the colour-blind-safe palette has 8 colours; merge or drop states before plotting"
    )]
    TooManyStates(usize),
    /// The embedded font could not be registered.
    #[error("embedded font {0} could not be loaded")]
    Font(&'static str),
    /// The drawing library reported an error.
    #[error("drawing failed: {0}")]
    Draw(String),
    /// PNG encoding failed.
    #[error("PNG encoding failed: {0}")]
    Png(String),
    /// Writing a file failed.
    #[error("writing {path}: {source}")]
    Io {
        /// File being written.
        path: PathBuf,
        /// Underlying error.
        #[source]
        source: std::io::Error,
    },
}

impl FigureError {
    pub(crate) fn input(what: &'static str, problem: impl Into<String>) -> Self {
        FigureError::Input {
            what,
            problem: problem.into(),
        }
    }
}

/// Map any drawing error into [`FigureError::Draw`].
pub(crate) fn de<E: std::fmt::Debug>(e: E) -> FigureError {
    FigureError::Draw(format!("{e:?}"))
}

/// A rendered figure: SVG text and PNG bytes of the same drawing.
#[derive(Debug, Clone)]
pub struct Figure {
    svg: String,
    png: Vec<u8>,
    width_px: u32,
    height_px: u32,
    width_mm: f64,
    height_mm: f64,
}

impl Figure {
    /// SVG document (physical size in mm, viewBox in pixels).
    pub fn svg(&self) -> &str {
        &self.svg
    }
    /// PNG file bytes.
    pub fn png(&self) -> &[u8] {
        &self.png
    }
    /// Pixel size (width, height).
    pub fn pixels(&self) -> (u32, u32) {
        (self.width_px, self.height_px)
    }
    /// Physical size in millimetres (width, height).
    pub fn size_mm(&self) -> (f64, f64) {
        (self.width_mm, self.height_mm)
    }

    /// Write `<dir>/<stem>.svg` and `<dir>/<stem>.png`; returns both paths.
    ///
    /// # Errors
    /// [`FigureError::Io`] naming the file that could not be written.
    pub fn write(&self, dir: &Path, stem: &str) -> Result<(PathBuf, PathBuf), FigureError> {
        let svg = dir.join(format!("{stem}.svg"));
        let png = dir.join(format!("{stem}.png"));
        std::fs::write(&svg, &self.svg).map_err(|source| FigureError::Io {
            path: svg.clone(),
            source,
        })?;
        std::fs::write(&png, &self.png).map_err(|source| FigureError::Io {
            path: png.clone(),
            source,
        })?;
        Ok((svg, png))
    }
}

/// Drawing code shared by both backends.
pub(crate) trait Painter {
    /// Default height as a fraction of the width.
    fn aspect(&self) -> f64;
    /// Draw onto a white root area.
    fn paint<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        k: &style::Scale,
    ) -> Result<(), FigureError>;
}

/// Render a painter to SVG and PNG.
pub(crate) fn render<P: Painter>(p: &P, o: &FigureOptions) -> Result<Figure, FigureError> {
    o.validate()?;
    style::ensure_fonts()?;
    let (w, h, w_mm, h_mm) = o.pixels(p.aspect());
    let k = style::Scale::new(o);

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(de)?;
        p.paint(&root, &k)?;
        root.present().map_err(de)?;
    }
    // Give the SVG its physical size; the viewBox keeps the pixel coordinates.
    let px_attr = format!("width=\"{w}\" height=\"{h}\"");
    let mm_attr = format!("width=\"{w_mm:.2}mm\" height=\"{h_mm:.2}mm\"");
    let svg = svg.replacen(&px_attr, &mm_attr, 1);

    let mut rgb = vec![0u8; w as usize * h as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut rgb, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(de)?;
        p.paint(&root, &k)?;
        root.present().map_err(de)?;
    }
    let png = encode_png(&rgb, w, h, o.dpi)?;
    Ok(Figure {
        svg,
        png,
        width_px: w,
        height_px: h,
        width_mm: w_mm,
        height_mm: h_mm,
    })
}

fn encode_png(rgb: &[u8], w: u32, h: u32, dpi: u32) -> Result<Vec<u8>, FigureError> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        // pHYs is in pixels per metre.
        let ppm = (f64::from(dpi) / 0.0254).round() as u32;
        enc.set_pixel_dims(Some(png::PixelDimensions {
            xppu: ppm,
            yppu: ppm,
            unit: png::Unit::Meter,
        }));
        let mut writer = enc
            .write_header()
            .map_err(|e| FigureError::Png(e.to_string()))?;
        writer
            .write_image_data(rgb)
            .map_err(|e| FigureError::Png(e.to_string()))?;
    }
    Ok(out)
}

/// "Nice" step (1, 2 or 5 × 10^k) giving about `target` intervals over `span`.
pub(crate) fn nice_step(span: f64, target: f64) -> f64 {
    let raw = span / target.max(1.0);
    let mag = 10f64.powf(raw.log10().floor());
    let f = raw / mag;
    let nice = if f < 1.5 {
        1.0
    } else if f < 3.5 {
        2.0
    } else if f < 7.5 {
        5.0
    } else {
        10.0
    };
    nice * mag
}

/// Axis tick text: up to three decimals without trailing zeros; scientific
/// notation for very small or large magnitudes, where fixed decimals would show 0.
pub(crate) fn tick(v: &f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(0.01..1e5).contains(&a) {
        return format!("{v:.1e}");
    }
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

/// Check that a state index has a colour and return it.
pub(crate) fn colour(k: usize) -> Result<RGBColor, FigureError> {
    palette::state_colour(k)
}

/// Draw a legend of coloured swatches in a row at pixel `(x, y)` of `area`.
pub(crate) fn swatch_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    k: &style::Scale,
    entries: &[(String, RGBColor)],
    (x, y): (i32, i32),
) -> Result<(), FigureError> {
    // Swatch size follows the base font so legends scale with text.
    let sw = k.pt(k.font_pt() * 0.9) as i32;
    let mut cx = x;
    let text = k.text(0.9);
    for (label, c) in entries {
        area.draw(&Rectangle::new([(cx, y), (cx + sw, y + sw)], c.filled()))
            .map_err(de)?;
        let pos = (cx + sw + sw / 3, y + sw / 2);
        area.draw(&Text::new(
            label.clone(),
            pos,
            text.clone().pos(plotters::style::text_anchor::Pos::new(
                plotters::style::text_anchor::HPos::Left,
                plotters::style::text_anchor::VPos::Center,
            )),
        ))
        .map_err(de)?;
        let (tw, _) = area.estimate_text_size(label, &text).map_err(de)?;
        cx += sw + sw / 3 + tw as i32 + sw;
    }
    Ok(())
}
