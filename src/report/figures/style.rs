//! Page geometry, fonts and line weights shared by the figures.
//!
//! Figures are sized for journal columns in millimetres and drawn at a chosen
//! resolution (300 dpi by default); font sizes and line widths are given in points
//! and converted to pixels, so a figure looks the same at any resolution. The SVG is
//! drawn on the same pixel grid as the PNG and then labelled with its physical size
//! in millimetres (its `viewBox` stays in pixels).
//!
//! Text is rendered with DejaVu Sans embedded in the binary (the `dejavu` crate;
//! Bitstream Vera / DejaVu font licence, free to embed and redistribute), registered
//! with plotters as "sans-serif" so no system font library is needed.

use super::FigureError;
use plotters::style::{FontStyle, IntoFont, RGBColor, TextStyle};
use std::sync::OnceLock;

/// Font family name used by every figure.
pub const FAMILY: &str = "sans-serif";

/// Register the embedded font once per process.
pub(crate) fn ensure_fonts() -> Result<(), FigureError> {
    static DONE: OnceLock<bool> = OnceLock::new();
    let ok = *DONE.get_or_init(|| {
        plotters::style::register_font(FAMILY, FontStyle::Normal, dejavu::sans::regular()).is_ok()
            && plotters::style::register_font(FAMILY, FontStyle::Bold, dejavu::sans::bold()).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(FigureError::Font("DejaVu Sans"))
    }
}

/// Figure width.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FigureWidth {
    /// Single journal column, 85 mm.
    Single,
    /// Full page width (two columns), 175 mm.
    Double,
    /// Any width in millimetres.
    Mm(f64),
}

impl FigureWidth {
    /// Width in millimetres.
    pub fn mm(self) -> f64 {
        match self {
            FigureWidth::Single => 85.0,
            FigureWidth::Double => 175.0,
            FigureWidth::Mm(w) => w,
        }
    }
}

/// Size and resolution of a figure.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FigureOptions {
    /// Width.
    pub width: FigureWidth,
    /// Height in millimetres; `None`: the figure kind's default aspect.
    pub height_mm: Option<f64>,
    /// Resolution of the PNG (and of the SVG's pixel grid), dots per inch.
    pub dpi: u32,
    /// Base font size, points.
    pub font_pt: f64,
}

impl Default for FigureOptions {
    fn default() -> Self {
        FigureOptions {
            width: FigureWidth::Single,
            height_mm: None,
            dpi: 300,
            font_pt: 7.0,
        }
    }
}

impl FigureOptions {
    /// Double-column variant of the defaults.
    pub fn double() -> Self {
        FigureOptions {
            width: FigureWidth::Double,
            ..Default::default()
        }
    }

    pub(crate) fn validate(&self) -> Result<(), FigureError> {
        let w = self.width.mm();
        if !(w.is_finite() && (20.0..=600.0).contains(&w)) {
            return Err(FigureError::input(
                "width",
                format!("{w} mm; use 20–600 mm"),
            ));
        }
        if let Some(h) = self.height_mm
            && !(h.is_finite() && (20.0..=600.0).contains(&h))
        {
            return Err(FigureError::input(
                "height_mm",
                format!("{h} mm; use 20–600 mm"),
            ));
        }
        if !(72..=1200).contains(&self.dpi) {
            return Err(FigureError::input(
                "dpi",
                format!("{}; use 72–1200", self.dpi),
            ));
        }
        if !(self.font_pt.is_finite() && (4.0..=24.0).contains(&self.font_pt)) {
            return Err(FigureError::input(
                "font_pt",
                format!("{}; use 4–24 pt", self.font_pt),
            ));
        }
        Ok(())
    }

    /// Pixel size for a default height of `aspect` × width.
    pub(crate) fn pixels(&self, aspect: f64) -> (u32, u32, f64, f64) {
        let w_mm = self.width.mm();
        let h_mm = self.height_mm.unwrap_or(w_mm * aspect);
        let px = |mm: f64| (mm / 25.4 * f64::from(self.dpi)).round() as u32;
        (px(w_mm), px(h_mm), w_mm, h_mm)
    }
}

/// Unit conversions for one figure.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Scale {
    dpi: f64,
    font_pt: f64,
}

impl Scale {
    pub(crate) fn new(o: &FigureOptions) -> Self {
        Scale {
            dpi: f64::from(o.dpi),
            font_pt: o.font_pt,
        }
    }
    /// Base font size, points.
    pub(crate) fn font_pt(&self) -> f64 {
        self.font_pt
    }
    /// Points to pixels.
    pub(crate) fn pt(&self, pt: f64) -> f64 {
        pt * self.dpi / 72.0
    }
    /// Points to whole pixels (at least 1).
    pub(crate) fn px(&self, pt: f64) -> u32 {
        self.pt(pt).round().max(1.0) as u32
    }
    /// Base text style, scaled by `rel` (1 = base size).
    pub(crate) fn text(&self, rel: f64) -> TextStyle<'static> {
        (FAMILY, self.pt(self.font_pt * rel))
            .into_font()
            .color(&RGBColor(0, 0, 0))
    }
    /// Line width of data lines, pixels.
    pub(crate) fn line(&self) -> u32 {
        self.px(1.0)
    }
    /// Line width of thin lines (axes, references), pixels.
    pub(crate) fn thin(&self) -> u32 {
        self.px(0.5)
    }
    /// Room left of the y axis for tick labels plus the axis title, pixels.
    pub(crate) fn label_area(&self) -> u32 {
        self.pt(self.font_pt * 3.6).round() as u32
    }
    /// Room under the x axis for tick labels plus the axis title, pixels.
    pub(crate) fn x_label_area(&self) -> u32 {
        self.pt(self.font_pt * 2.9).round() as u32
    }
    /// Outer margin, pixels.
    pub(crate) fn margin(&self) -> u32 {
        self.pt(self.font_pt * 0.8).round() as u32
    }
}
