//! Observation error: how far a fix may lie from the animal, per location class or per
//! fix from an error ellipse, expressed as a 2 × 2 covariance in projected metres.
//!
//! Class-based errors are independent on x and y (a diagonal covariance with the class's
//! two standard deviations); an error ellipse gives a full covariance whose off-diagonal
//! term couples the axes, which the filter handles with a joint two-dimensional update.
//!
//! Classes are the fixes' own [`LocClass`]. The error table ([`ClassErrors`]) has one
//! entry per usable class and none for Argos class Z: those locations failed the
//! operator's plausibility checks and cleaning drops them before smoothing, so a look-up
//! for Z returns `None` and [`regularise`](super::regularise) rejects such a fix with
//! [`RegularError::UnusableClass`].

use serde::{Deserialize, Serialize};

use super::RegularError;
use crate::tracks::class::LocClass;

/// A symmetric 2 × 2 observation-error covariance (m²) on the projected x (east) and y
/// (north) axes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ErrorCovariance {
    xx: f64,
    xy: f64,
    yy: f64,
}

impl ErrorCovariance {
    /// Checked constructor: the matrix must be finite and positive definite.
    ///
    /// # Errors
    /// [`RegularError::InvalidCovariance`] otherwise.
    pub fn new(xx: f64, xy: f64, yy: f64) -> Result<Self, RegularError> {
        let ok = xx.is_finite()
            && xy.is_finite()
            && yy.is_finite()
            && xx > 0.0
            && yy > 0.0
            && xx * yy - xy * xy > 0.0;
        if ok {
            Ok(Self { xx, xy, yy })
        } else {
            Err(RegularError::InvalidCovariance { xx, xy, yy })
        }
    }

    /// Diagonal covariance from two standard deviations (m).
    ///
    /// # Errors
    /// [`RegularError::InvalidCovariance`] when either is not finite and positive.
    pub fn diagonal(sd_x: f64, sd_y: f64) -> Result<Self, RegularError> {
        if !(sd_x > 0.0 && sd_y > 0.0) {
            return Err(RegularError::InvalidCovariance {
                xx: sd_x,
                xy: 0.0,
                yy: sd_y,
            });
        }
        Self::new(sd_x * sd_x, 0.0, sd_y * sd_y)
    }

    /// Covariance from an error ellipse.
    ///
    /// `semi_major` and `semi_minor` are the 1-σ semi-axes in metres (the Argos error
    /// ellipse is reported at one standard deviation; scale other confidence levels to
    /// 1 σ first); `orientation_deg` is the angle of the semi-major axis in degrees
    /// clockwise from north. The projected y axis is taken as north, i.e. grid
    /// convergence of the projection is neglected (below a degree near the projection's
    /// central meridian).
    ///
    /// # Formula
    /// With θ the orientation, the major axis points along `u = (sin θ, cos θ)` and the
    /// minor along `w = (cos θ, −sin θ)` in (east, north); `Σ = a² u uᵀ + b² w wᵀ`:
    ///
    /// ```text
    /// σx² = a² sin²θ + b² cos²θ
    /// σy² = a² cos²θ + b² sin²θ
    /// σxy = (a² − b²) sin θ cos θ
    /// ```
    ///
    /// # Errors
    /// [`RegularError::InvalidEllipse`] when the axes are not finite and positive, the
    /// minor exceeds the major, or the orientation is not finite.
    ///
    /// # Examples
    /// ```
    /// use cairn::tracks::regular::ErrorCovariance;
    /// // Major axis pointing east: x carries the major variance.
    /// let c = ErrorCovariance::from_ellipse(300.0, 100.0, 90.0).unwrap();
    /// assert!((c.xx() - 90_000.0).abs() < 1e-6);
    /// assert!((c.yy() - 10_000.0).abs() < 1e-6);
    /// assert!(c.xy().abs() < 1e-6);
    /// ```
    pub fn from_ellipse(
        semi_major: f64,
        semi_minor: f64,
        orientation_deg: f64,
    ) -> Result<Self, RegularError> {
        let valid = semi_major.is_finite()
            && semi_minor.is_finite()
            && orientation_deg.is_finite()
            && semi_minor > 0.0
            && semi_major >= semi_minor;
        if !valid {
            return Err(RegularError::InvalidEllipse {
                semi_major,
                semi_minor,
                orientation_deg,
            });
        }
        let (s, c) = orientation_deg.to_radians().sin_cos();
        let (a2, b2) = (semi_major * semi_major, semi_minor * semi_minor);
        Self::new(
            a2 * s * s + b2 * c * c,
            (a2 - b2) * s * c,
            a2 * c * c + b2 * s * s,
        )
    }

    /// Variance on x (m²).
    pub fn xx(&self) -> f64 {
        self.xx
    }
    /// Covariance of x and y (m²).
    pub fn xy(&self) -> f64 {
        self.xy
    }
    /// Variance on y (m²).
    pub fn yy(&self) -> f64 {
        self.yy
    }

    pub(crate) fn scaled(&self, factor: f64) -> Self {
        Self {
            xx: self.xx * factor,
            xy: self.xy * factor,
            yy: self.yy * factor,
        }
    }
}

/// A fix's observation error: its class (standard deviations looked up in
/// [`ClassErrors`]) or its own covariance.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum ObservationError {
    /// Use the class's standard deviations (any class but Argos Z, which has none).
    Class(LocClass),
    /// Use this covariance (e.g. from [`ErrorCovariance::from_ellipse`]).
    Covariance(ErrorCovariance),
}

/// Error standard deviations on x and y (m) of one class.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct AxisSd {
    /// Standard deviation on x (east), metres.
    pub x_m: f64,
    /// Standard deviation on y (north), metres.
    pub y_m: f64,
}

/// Per-class error standard deviations.
///
/// Defaults: the Argos values are of the order of the error spreads reported for
/// captive grey seals with known positions by Vincent, McConnell, Ridoux & Fedak (2002,
/// Marine Mammal Science 18:156–166), longitude (x) errors larger than latitude (y)
/// errors as also found by Boyd & Brightsmith (2013, PLoS ONE 8:e63051). **The numbers
/// are recalled from memory and rounded, not copied from the paper's table**; check them
/// against the paper (or better, a validation study for your species and tag) before
/// relying on them. GPS and Fastloc-GPS values are typical tens-of-metres figures (the
/// Argos operator's manual quotes < 100 m for GPS), also from memory. The error-scale
/// multiplier ([`RegularSettings::estimate_error_scale`](super::RegularSettings)) lets
/// the data rescale all of them jointly.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ClassErrors {
    /// GPS.
    pub gps: AxisSd,
    /// Fastloc-GPS.
    pub fastloc_gps: AxisSd,
    /// Argos 3.
    pub argos3: AxisSd,
    /// Argos 2.
    pub argos2: AxisSd,
    /// Argos 1.
    pub argos1: AxisSd,
    /// Argos 0.
    pub argos0: AxisSd,
    /// Argos A.
    pub argos_a: AxisSd,
    /// Argos B.
    pub argos_b: AxisSd,
}

impl Default for ClassErrors {
    fn default() -> Self {
        let sd = |x_m, y_m| AxisSd { x_m, y_m };
        Self {
            gps: sd(30.0, 30.0),
            fastloc_gps: sd(50.0, 50.0),
            argos3: sd(300.0, 150.0),
            argos2: sd(500.0, 300.0),
            argos1: sd(1_000.0, 900.0),
            argos0: sd(2_500.0, 1_500.0),
            argos_a: sd(1_700.0, 1_100.0),
            argos_b: sd(4_000.0, 3_000.0),
        }
    }
}

impl ClassErrors {
    /// The standard deviations of one class; `None` for Argos class Z, which has no
    /// entry (cleaning drops it before smoothing).
    ///
    /// # Examples
    /// ```
    /// use cairn::tracks::class::LocClass;
    /// use cairn::tracks::regular::ClassErrors;
    /// let errors = ClassErrors::default();
    /// assert_eq!(errors.get(LocClass::Gps).map(|sd| sd.x_m), Some(30.0));
    /// assert_eq!(errors.get(LocClass::ArgosZ), None);
    /// ```
    pub fn get(&self, class: LocClass) -> Option<AxisSd> {
        Some(match class {
            LocClass::Gps => self.gps,
            LocClass::FastlocGps => self.fastloc_gps,
            LocClass::Argos3 => self.argos3,
            LocClass::Argos2 => self.argos2,
            LocClass::Argos1 => self.argos1,
            LocClass::Argos0 => self.argos0,
            LocClass::ArgosA => self.argos_a,
            LocClass::ArgosB => self.argos_b,
            LocClass::ArgosZ => return None,
        })
    }

    /// The standard deviations of one class, to change them; `None` for Argos class Z,
    /// which has no entry.
    pub fn get_mut(&mut self, class: LocClass) -> Option<&mut AxisSd> {
        Some(match class {
            LocClass::Gps => &mut self.gps,
            LocClass::FastlocGps => &mut self.fastloc_gps,
            LocClass::Argos3 => &mut self.argos3,
            LocClass::Argos2 => &mut self.argos2,
            LocClass::Argos1 => &mut self.argos1,
            LocClass::Argos0 => &mut self.argos0,
            LocClass::ArgosA => &mut self.argos_a,
            LocClass::ArgosB => &mut self.argos_b,
            LocClass::ArgosZ => return None,
        })
    }

    /// Every entry, best class first: one per usable class (all but Argos Z).
    pub fn iter(&self) -> impl Iterator<Item = (LocClass, AxisSd)> + '_ {
        LocClass::ALL
            .into_iter()
            .filter_map(|c| self.get(c).map(|sd| (c, sd)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_table_has_an_entry_for_every_usable_class_and_none_for_z() {
        let mut errors = ClassErrors::default();
        for c in LocClass::ALL {
            assert_eq!(errors.get(c).is_some(), c.is_valid(), "{c:?}");
            assert_eq!(errors.get_mut(c).is_some(), c.is_valid(), "{c:?}");
        }
        let classes: Vec<LocClass> = errors.iter().map(|(c, _)| c).collect();
        let usable: Vec<LocClass> = LocClass::ALL.into_iter().filter(|c| c.is_valid()).collect();
        assert_eq!(classes, usable);
    }

    #[test]
    fn get_mut_changes_only_its_class() {
        let mut errors = ClassErrors::default();
        let sd = AxisSd { x_m: 7.0, y_m: 8.0 };
        *errors.get_mut(LocClass::Argos1).unwrap() = sd;
        assert_eq!(errors.get(LocClass::Argos1), Some(sd));
        assert_eq!(
            errors.get(LocClass::Argos2),
            ClassErrors::default().get(LocClass::Argos2)
        );
    }
}
