//! The colour-blind-safe palette shared by every figure, so that a state has the
//! same colour in the budget bars, the occupancy curves, the maps and the
//! histograms.
//!
//! # Formula
//! The eight colours of Okabe, M. & Ito, K. (2008), *Color Universal Design (CUD):
//! How to make figures and presentations that are friendly to colorblind people*
//! (J*Fly), given as sRGB: black (0,0,0), orange (230,159,0), sky blue (86,180,233),
//! bluish green (0,158,115), yellow (240,228,66), blue (0,114,178), vermillion
//! (213,94,0), reddish purple (204,121,167). States take them in an order that puts
//! the most distinct hues first and black (used for axes) last.

use super::FigureError;
use plotters::style::RGBColor;

/// The Okabe–Ito colours in their published order.
pub const OKABE_ITO: [RGBColor; 8] = [
    RGBColor(0, 0, 0),
    RGBColor(230, 159, 0),
    RGBColor(86, 180, 233),
    RGBColor(0, 158, 115),
    RGBColor(240, 228, 66),
    RGBColor(0, 114, 178),
    RGBColor(213, 94, 0),
    RGBColor(204, 121, 167),
];

/// Palette index (into [`OKABE_ITO`]) used for state 0, 1, 2, …: blue, orange,
/// bluish green, vermillion, reddish purple, sky blue, yellow, black.
const STATE_ORDER: [usize; 8] = [5, 1, 3, 6, 7, 2, 4, 0];

/// Most states a figure can colour distinctly.
pub const MAX_STATES: usize = 8;

/// Colour of state `k`.
///
/// # Errors
/// [`FigureError::TooManyStates`] for `k ≥ 8`: beyond eight the palette would have
/// to reuse or invent colours that are no longer safe for colour-blind readers.
pub fn state_colour(k: usize) -> Result<RGBColor, FigureError> {
    STATE_ORDER
        .get(k)
        .map(|&i| OKABE_ITO[i])
        .ok_or(FigureError::TooManyStates(k + 1))
}

/// Hex code (`#RRGGBB`, upper case as written in SVG) of state `k`.
///
/// # Errors
/// As [`state_colour`].
pub fn state_hex(k: usize) -> Result<String, FigureError> {
    let RGBColor(r, g, b) = state_colour(k)?;
    Ok(format!("#{r:02X}{g:02X}{b:02X}"))
}

/// Neutral grey for night masks and reference lines.
pub const GREY: RGBColor = RGBColor(110, 110, 110);
/// Light grey for confidence bands.
pub const LIGHT_GREY: RGBColor = RGBColor(200, 200, 200);
