//! Sun position, diel phase and local solar time for telemetry fixes.
//!
//! Positions come from the NREL Solar Position Algorithm (SPA, Reda & Andreas 2004)
//! as implemented by the `solar-positioning` crate in its SPA mode (valid for years
//! −2000…6000; we limit to −500…3000, the range of the ΔT model). Elevations are
//! *geometric* topocentric elevations of the sun's centre at sea level, without
//! atmospheric refraction: that is the quantity the conventional twilight thresholds
//! are defined on (the −0.833° sunrise threshold already folds in 34′ of standard
//! refraction and the 16′ solar semi-diameter), and it does not depend on weather we
//! do not know. The diel phase of a fix is read from that elevation against
//! configurable thresholds; inside a twilight band, dawn and dusk are told apart by
//! whether the sun is rising, from the sign of the elevation's time derivative (hour
//! angle and declination rates both enter, so it is right in polar day and night and
//! at the poles, where the hour angle alone says nothing). The location-free part of
//! SPA (the costly one, via the crate) runs exactly at two-hourly knots and is
//! interpolated between them (< 1e-5°); the location steps (eqs. 26–44) are written
//! here and run per fix. [`sun_position_with`] runs the crate's full SPA at the
//! instant (with height, ΔT and refraction settings) and is the reference the fast
//! path is tested against. Local apparent solar time comes from longitude and the
//! equation of time.
//!
//! Time scale: instants are UTC and are used as UT1 (|UT1 − UTC| < 0.9 s, worth at
//! most 0.004° of hour angle). ΔT = TT − UT comes from the Espenak–Meeus polynomials
//! (`solar_positioning::delta_t::estimate`); an error of a few seconds in ΔT moves the
//! sun by less than 0.0001°.

use chrono::{DateTime, Datelike, Timelike, Utc};
use rayon::prelude::*;
use solar_positioning::{
    Location, PreparedPositions, RefractionCorrection, SolarPositions, delta_t,
};
use thiserror::Error;

/// Spacing of the knots at which the location-free part of SPA is evaluated exactly
/// (seconds); see [`sun_position`] for the interpolation error it implies (< 1e-5°).
const KNOT_SPACING_S: i64 = 7_200;

/// 2000-01-01T12:00:00Z (J2000.0) as Unix seconds.
const J2000_UNIX_S: i64 = 946_728_000;

/// Polar/equatorial axis ratio b/a of the earth used by SPA (Reda & Andreas 2004, eq. 28).
const EARTH_AXIS_RATIO: f64 = 0.996_647_19;

/// Errors from the sun computations.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum SunError {
    /// A coordinate is not a valid longitude/latitude in degrees.
    #[error(
        "fix {index}: longitude {lon} / latitude {lat} is not a valid position (longitude must be in [-180, 180], latitude in [-90, 90] degrees); check the column mapping (are lon and lat swapped, or are the values projected metres?)"
    )]
    Location {
        /// Position of the fix in the input (0-based).
        index: usize,
        /// Longitude given.
        lon: f64,
        /// Latitude given.
        lat: f64,
    },
    /// The instant is outside the range supported by the ΔT model and SPA.
    #[error(
        "fix {index}: time {time} is outside the supported years -500..3000; check the time column and its units"
    )]
    Time {
        /// Position of the fix in the input (0-based).
        index: usize,
        /// The instant, as RFC 3339.
        time: String,
    },
    /// The input columns have different lengths.
    #[error(
        "sun annotation needs one time, longitude and latitude per fix, got {times} times, {lons} longitudes and {lats} latitudes"
    )]
    Lengths {
        /// Number of times.
        times: usize,
        /// Number of longitudes.
        lons: usize,
        /// Number of latitudes.
        lats: usize,
    },
    /// Diel thresholds not strictly decreasing or not within (−90°, 90°).
    #[error(
        "diel thresholds must be finite, inside (-90, 90) degrees and strictly decreasing (day > civil > nautical > astronomical); got day {day}, civil {civil}, nautical {nautical}, astronomical {astronomical}: fix the study file's diel settings"
    )]
    Thresholds {
        /// Day/sunrise threshold given.
        day: f64,
        /// Civil twilight lower bound given.
        civil: f64,
        /// Nautical twilight lower bound given.
        nautical: f64,
        /// Astronomical twilight lower bound given.
        astronomical: f64,
    },
}

/// Topocentric position of the sun's centre seen from sea level, without refraction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SunPosition {
    /// Geometric elevation above the horizon, degrees (negative below).
    pub elevation_deg: f64,
    /// Azimuth, degrees clockwise from true north, in [0, 360).
    pub azimuth_deg: f64,
}

/// Diel phase of a fix, from the sun's geometric elevation and whether it is rising.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum DielPhase {
    /// Elevation ≥ the day threshold (default −0.833°).
    Day,
    /// Civil twilight, sun rising.
    CivilDawn,
    /// Civil twilight, sun setting.
    CivilDusk,
    /// Nautical twilight, sun rising.
    NauticalDawn,
    /// Nautical twilight, sun setting.
    NauticalDusk,
    /// Astronomical twilight, sun rising.
    AstronomicalDawn,
    /// Astronomical twilight, sun setting.
    AstronomicalDusk,
    /// Elevation below the astronomical threshold (default −18°).
    Night,
}

impl DielPhase {
    /// All phases, in the order of a day from noon.
    pub const ALL: [DielPhase; 8] = [
        DielPhase::Day,
        DielPhase::CivilDusk,
        DielPhase::NauticalDusk,
        DielPhase::AstronomicalDusk,
        DielPhase::Night,
        DielPhase::AstronomicalDawn,
        DielPhase::NauticalDawn,
        DielPhase::CivilDawn,
    ];

    /// Stable snake_case label used in tables (`"civil_dawn"`, …).
    pub fn label(self) -> &'static str {
        match self {
            DielPhase::Day => "day",
            DielPhase::CivilDawn => "civil_dawn",
            DielPhase::CivilDusk => "civil_dusk",
            DielPhase::NauticalDawn => "nautical_dawn",
            DielPhase::NauticalDusk => "nautical_dusk",
            DielPhase::AstronomicalDawn => "astronomical_dawn",
            DielPhase::AstronomicalDusk => "astronomical_dusk",
            DielPhase::Night => "night",
        }
    }

    /// True for the three twilight phases of either direction.
    pub fn is_twilight(self) -> bool {
        !matches!(self, DielPhase::Day | DielPhase::Night)
    }
}

impl std::fmt::Display for DielPhase {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.label())
    }
}

/// Lower elevation bounds (degrees, geometric) of day and the three twilights.
///
/// A fix is `Day` when elevation ≥ `day`; civil twilight when `civil` ≤ elevation <
/// `day`; nautical when `nautical` ≤ elevation < `civil`; astronomical when
/// `astronomical` ≤ elevation < `nautical`; `Night` below `astronomical`.
/// Defaults are the common conventions −0.833°, −6°, −12°, −18°.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DielThresholds {
    day: f64,
    civil: f64,
    nautical: f64,
    astronomical: f64,
}

impl Default for DielThresholds {
    fn default() -> Self {
        DielThresholds {
            day: -0.833,
            civil: -6.0,
            nautical: -12.0,
            astronomical: -18.0,
        }
    }
}

impl DielThresholds {
    /// Checked thresholds.
    ///
    /// # Errors
    /// [`SunError::Thresholds`] unless all four are finite, inside (−90, 90) and
    /// strictly decreasing.
    ///
    /// # Examples
    /// ```
    /// use cairn::geo::sun::DielThresholds;
    /// assert!(DielThresholds::new(0.0, -6.0, -12.0, -18.0).is_ok());
    /// assert!(DielThresholds::new(-6.0, 0.0, -12.0, -18.0).is_err());
    /// ```
    pub fn new(day: f64, civil: f64, nautical: f64, astronomical: f64) -> Result<Self, SunError> {
        let all = [day, civil, nautical, astronomical];
        let in_range = all.iter().all(|v| v.is_finite() && v.abs() < 90.0);
        let decreasing = day > civil && civil > nautical && nautical > astronomical;
        if in_range && decreasing {
            Ok(DielThresholds {
                day,
                civil,
                nautical,
                astronomical,
            })
        } else {
            Err(SunError::Thresholds {
                day,
                civil,
                nautical,
                astronomical,
            })
        }
    }

    /// Day threshold (degrees).
    pub fn day(&self) -> f64 {
        self.day
    }
    /// Lower bound of civil twilight (degrees).
    pub fn civil(&self) -> f64 {
        self.civil
    }
    /// Lower bound of nautical twilight (degrees).
    pub fn nautical(&self) -> f64 {
        self.nautical
    }
    /// Lower bound of astronomical twilight (degrees).
    pub fn astronomical(&self) -> f64 {
        self.astronomical
    }

    /// Phase for an elevation and a rising flag (the flag only matters in twilight).
    ///
    /// # Examples
    /// ```
    /// use cairn::geo::sun::{DielPhase, DielThresholds};
    /// let th = DielThresholds::default();
    /// assert_eq!(th.classify(-3.0, true), DielPhase::CivilDawn);
    /// assert_eq!(th.classify(-20.0, false), DielPhase::Night);
    /// ```
    pub fn classify(&self, elevation_deg: f64, rising: bool) -> DielPhase {
        let pick = |dawn, dusk| if rising { dawn } else { dusk };
        if elevation_deg >= self.day {
            DielPhase::Day
        } else if elevation_deg >= self.civil {
            pick(DielPhase::CivilDawn, DielPhase::CivilDusk)
        } else if elevation_deg >= self.nautical {
            pick(DielPhase::NauticalDawn, DielPhase::NauticalDusk)
        } else if elevation_deg >= self.astronomical {
            pick(DielPhase::AstronomicalDawn, DielPhase::AstronomicalDusk)
        } else {
            DielPhase::Night
        }
    }
}

/// Sun quantities for one fix.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SunAnnotation {
    /// Geometric topocentric position.
    pub position: SunPosition,
    /// Diel phase under the thresholds used.
    pub phase: DielPhase,
    /// Local apparent solar time, hours in [0, 24): 12 h + H/15 with H the sun's
    /// geocentric local hour angle in degrees (Meeus 1998, ch. 28: apparent solar
    /// time is the hour angle of the true sun plus 12 h). Consistent with
    /// [`local_solar_hour`] to within the few seconds of its series.
    pub solar_hour: f64,
}

/// Wrap hours to [0, 24).
fn wrap_hours(h: f64) -> f64 {
    let h = h.rem_euclid(24.0);
    // rem_euclid can return 24.0 for tiny negative inputs through rounding.
    if h >= 24.0 { 0.0 } else { h }
}

fn decimal_year(t: &DateTime<Utc>) -> f64 {
    let days = if chrono::NaiveDate::from_ymd_opt(t.year(), 2, 29).is_some() {
        366.0
    } else {
        365.0
    };
    let day_fraction = f64::from(t.num_seconds_from_midnight()) / 86_400.0;
    f64::from(t.year()) + (f64::from(t.ordinal0()) + day_fraction) / days
}

fn prepare_with(
    t: &DateTime<Utc>,
    index: usize,
    delta_t_s: Option<f64>,
) -> Result<PreparedPositions, SunError> {
    let time_err = || SunError::Time {
        index,
        time: t.to_rfc3339(),
    };
    let year = decimal_year(t);
    if !(-500.0..=3000.0).contains(&year) {
        return Err(time_err());
    }
    let dt = match delta_t_s {
        Some(v) if v.is_finite() => v,
        Some(_) => return Err(time_err()),
        None => delta_t::estimate(year).map_err(|_| time_err())?,
    };
    SolarPositions::new()
        .for_time(t, dt)
        .map_err(|_| time_err())
}

fn check_location(index: usize, lon: f64, lat: f64) -> Result<(), SunError> {
    if lon.is_finite() && lat.is_finite() && lon.abs() <= 180.0 && lat.abs() <= 90.0 {
        Ok(())
    } else {
        Err(SunError::Location { index, lon, lat })
    }
}

/// Exact SPA values at one knot instant (degrees; `r` in AU).
#[derive(Debug, Clone, Copy)]
struct Knot {
    /// Geocentric right ascension α.
    alpha: f64,
    /// Geocentric declination δ.
    delta: f64,
    /// Earth–sun distance R.
    r: f64,
    /// Nutation in right ascension Δψ·cos ε (the equation of the equinoxes).
    equinox_eq: f64,
}

fn knot_instant(k: i64) -> Option<DateTime<Utc>> {
    DateTime::from_timestamp(k.checked_mul(KNOT_SPACING_S)?, 0)
}

fn knot(k: i64, index: usize, fix_time: &DateTime<Utc>) -> Result<Knot, SunError> {
    let t = knot_instant(k).ok_or_else(|| SunError::Time {
        index,
        time: fix_time.to_rfc3339(),
    })?;
    let p = prepare_with(&t, index, None).map_err(|_| SunError::Time {
        index,
        time: fix_time.to_rfc3339(),
    })?;
    let days = (k * KNOT_SPACING_S - J2000_UNIX_S) as f64 / 86_400.0;
    Ok(Knot {
        alpha: p.right_ascension(),
        delta: p.declination(),
        r: p.earth_radius_vector()
            .expect("SPA provides the radius vector"),
        equinox_eq: equation_of_equinoxes_deg(days / 36_525.0),
    })
}

/// Nutation in right ascension, degrees.
///
/// # Formula
/// Δψ cos ε with the abridged nutation of Meeus (1998), *Astronomical Algorithms*,
/// 2nd ed., ch. 22: Δψ = −17.20″ sin Ω − 1.32″ sin 2L − 0.23″ sin 2L′ + 0.21″ sin 2Ω
/// (good to 0.5″ = 0.00014°), ε ≈ ε₀ = 23°26′21.448″ − 46.815″ T.
fn equation_of_equinoxes_deg(t: f64) -> f64 {
    let omega = (125.04452 - 1934.136261 * t).to_radians();
    let l = (280.4665 + 36_000.769_8 * t).to_radians();
    let lp = (218.3165 + 481_267.881_3 * t).to_radians();
    let dpsi = -17.20 * omega.sin() - 1.32 * (2.0 * l).sin() - 0.23 * (2.0 * lp).sin()
        + 0.21 * (2.0 * omega).sin();
    let eps = (23.439_291_1 - 0.013_004_2 * t).to_radians();
    dpsi / 3600.0 * eps.cos()
}

/// Solar ephemeris for a set of instants: exact SPA at knots every
/// [`KNOT_SPACING_S`], linear interpolation of α, δ, R between them.
struct Ephemeris {
    ks: Vec<i64>,
    knots: Vec<Result<Knot, SunError>>,
}

/// Knot index of an instant (whole knot intervals since the Unix epoch).
fn knot_index(t: &DateTime<Utc>) -> i64 {
    t.timestamp().div_euclid(KNOT_SPACING_S)
}

impl Ephemeris {
    /// Knots for the instants `times[i]` for `i` in `order`, which must be sorted by time.
    fn for_sorted(times: &[DateTime<Utc>], order: &[usize]) -> Self {
        let mut needed: Vec<(i64, usize)> = Vec::new();
        for &i in order {
            let k = knot_index(&times[i]);
            for kk in [k, k + 1] {
                if needed.last().is_none_or(|&(last, _)| last < kk) {
                    needed.push((kk, i));
                }
            }
        }
        let knots = needed
            .par_iter()
            .map(|&(k, i)| knot(k, i, &times[i]))
            .collect();
        Ephemeris {
            ks: needed.iter().map(|&(k, _)| k).collect(),
            knots,
        }
    }

    fn annotate(
        &self,
        time: &DateTime<Utc>,
        lon: f64,
        lat: f64,
        th: &DielThresholds,
        index: usize,
    ) -> Result<SunAnnotation, SunError> {
        check_location(index, lon, lat)?;
        let k = knot_index(time);
        let pos = self
            .ks
            .binary_search(&k)
            .expect("knots cover every instant");
        let (k0, k1) = match (&self.knots[pos], &self.knots[pos + 1]) {
            (Ok(a), Ok(b)) => (a, b),
            _ => {
                return Err(SunError::Time {
                    index,
                    time: time.to_rfc3339(),
                });
            }
        };
        let since_knot = (time.timestamp() - k * KNOT_SPACING_S) as f64
            + f64::from(time.timestamp_subsec_nanos()) * 1e-9;
        let f = since_knot / KNOT_SPACING_S as f64;
        let d_alpha = (k1.alpha - k0.alpha + 540.0).rem_euclid(360.0) - 180.0;
        let alpha = k0.alpha + f * d_alpha;
        let delta = k0.delta + f * (k1.delta - k0.delta);
        let r = k0.r + f * (k1.r - k0.r);
        let eqeq = k0.equinox_eq + f * (k1.equinox_eq - k0.equinox_eq);
        // Days since J2000.0 (UT), split so the large multiple of 360° drops exactly.
        let secs = (time.timestamp() - J2000_UNIX_S) as f64
            + f64::from(time.timestamp_subsec_nanos()) * 1e-9;
        let days = secs / 86_400.0;
        let jc = days / 36_525.0;
        // SPA eq. 12–15 (Reda & Andreas 2004, §3.7): apparent sidereal time at Greenwich.
        let nu = 280.460_618_37
            + 360.0 * days.fract()
            + 0.985_647_366_29 * days
            + 0.000_387_933 * jc * jc
            - jc * jc * jc / 38_710_000.0
            + eqeq;
        let rates = Rates {
            // Hour angle advances with sidereal time, minus the sun's own motion in α.
            hour_angle_deg_per_s: 360.985_647_366_29 / 86_400.0 - d_alpha / KNOT_SPACING_S as f64,
            declination_deg_per_s: (k1.delta - k0.delta) / KNOT_SPACING_S as f64,
        };
        let hour_angle = nu + lon - alpha;
        let (position, rising) = topocentric(lat, hour_angle, delta, r, rates);
        Ok(SunAnnotation {
            position,
            phase: th.classify(position.elevation_deg, rising),
            solar_hour: wrap_hours(12.0 + hour_angle / 15.0),
        })
    }
}

/// Time derivatives of the local hour angle and the declination.
struct Rates {
    hour_angle_deg_per_s: f64,
    declination_deg_per_s: f64,
}

/// Topocentric elevation and azimuth at sea level from the geocentric local hour angle
/// `h_deg`, declination `delta_deg` and distance `r_au`; also whether the elevation is
/// increasing.
///
/// # Formula
/// Reda & Andreas (2004), eqs. 26–38 and 41–44 with observer height 0 and no
/// refraction: equatorial parallax ξ = 8.794″/R; u = atan(0.99664719 tan φ);
/// x = cos u, y = 0.99664719 sin u; Δα = atan2(−x sin ξ sin H, cos δ − x sin ξ cos H);
/// δ′ = atan2((sin δ − y sin ξ) cos Δα, cos δ − x sin ξ cos H); H′ = H − Δα;
/// e = asin(sin φ sin δ′ + cos φ cos δ′ cos H′);
/// Φ = 180° + atan2(sin H′, cos H′ sin φ − tan δ′ cos φ).
/// Rising: d(sin e)/dt = (sin φ cos δ′ − cos φ sin δ′ cos H′) δ̇ − cos φ cos δ′ sin H′ Ḣ > 0,
/// the derivative of the elevation equation (parallax held fixed: it changes the
/// rate by < 1e-4 of itself).
fn topocentric(
    lat: f64,
    h_deg: f64,
    delta_deg: f64,
    r_au: f64,
    rates: Rates,
) -> (SunPosition, bool) {
    let phi = lat.to_radians();
    let h = h_deg.rem_euclid(360.0).to_radians();
    let delta = delta_deg.to_radians();
    let xi = (8.794 / (3600.0 * r_au)).to_radians();
    let (sin_xi, (sin_phi, cos_phi)) = (xi.sin(), phi.sin_cos());
    let (sin_delta, cos_delta) = delta.sin_cos();
    let (sin_h, cos_h) = h.sin_cos();
    let u = (EARTH_AXIS_RATIO * phi.tan()).atan();
    let (x, y) = (u.cos(), EARTH_AXIS_RATIO * u.sin());
    let denom = cos_delta - x * sin_xi * cos_h;
    let d_alpha = (-x * sin_xi * sin_h).atan2(denom);
    let delta_p = ((sin_delta - y * sin_xi) * d_alpha.cos()).atan2(denom);
    let h_p = h - d_alpha;
    let (sin_dp, cos_dp) = delta_p.sin_cos();
    let (sin_hp, cos_hp) = h_p.sin_cos();
    let sin_e = (sin_phi * sin_dp + cos_phi * cos_dp * cos_hp).clamp(-1.0, 1.0);
    let elevation_deg = sin_e.asin().to_degrees();
    let gamma = sin_hp.atan2(cos_hp * sin_phi - sin_dp / cos_dp * cos_phi);
    let azimuth_deg = (180.0 + gamma.to_degrees()).rem_euclid(360.0);
    let d_sin_e = (sin_phi * cos_dp - cos_phi * sin_dp * cos_hp) * rates.declination_deg_per_s
        - cos_phi * cos_dp * sin_hp * rates.hour_angle_deg_per_s;
    (
        SunPosition {
            elevation_deg,
            azimuth_deg,
        },
        d_sin_e > 0.0,
    )
}

/// Geometric topocentric sun position at sea level for one instant and place.
///
/// # Formula
/// NREL Solar Position Algorithm: Reda, I. & Andreas, A. (2004), "Solar position
/// algorithm for solar radiation applications", Solar Energy 76(5), 577–589,
/// eqs. 1–44 without the refraction term (eq. 42 with Δe = 0). The location-free
/// steps (α, δ, R) are evaluated exactly at knots every two hours and interpolated
/// linearly between them: their curvature bounds that error by
/// |δ̈| h²/8 ≈ 0.0069°/day² × (1/12 day)²/8 < 1e-5°. Sidereal time is computed at
/// the instant (SPA eq. 12–15, with the abridged nutation of Meeus ch. 22, < 0.0002°).
///
/// # Errors
/// [`SunError::Location`] for an invalid longitude/latitude, [`SunError::Time`]
/// outside years −500…3000.
///
/// # Examples
/// ```
/// use chrono::{TimeZone, Utc};
/// use cairn::geo::sun::sun_position;
/// let t = Utc.with_ymd_and_hms(2024, 6, 21, 12, 0, 0).unwrap();
/// let p = sun_position(&t, 0.0, 51.5).unwrap();
/// assert!((p.elevation_deg - 61.9).abs() < 0.2);
/// ```
pub fn sun_position(time: &DateTime<Utc>, lon: f64, lat: f64) -> Result<SunPosition, SunError> {
    Ok(annotate_fix(time, lon, lat, &DielThresholds::default())?.position)
}

/// Observer settings for [`sun_position_with`]; the defaults are sea level, modelled
/// ΔT and no refraction.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SpaSettings {
    /// Observer height above sea level, metres (changes parallax only).
    pub height_m: f64,
    /// ΔT = TT − UT1 in seconds; `None` uses the Espenak–Meeus estimate.
    pub delta_t_s: Option<f64>,
    /// `Some((pressure_hpa, temperature_c))` returns the *apparent* (refracted)
    /// elevation with SPA's refraction formula (Reda & Andreas 2004, eq. 42).
    pub refraction: Option<(f64, f64)>,
}

/// Sun position by full SPA at the instant, with explicit observer height, ΔT and
/// optional refraction (about 20× slower than [`sun_position`]).
///
/// # Formula
/// Reda & Andreas (2004), eqs. 1–44; with `refraction` set, the elevation includes
/// Δe = (P/1010)(283/(273+T)) · 1.02 / (60 tan(e₀ + 10.3/(e₀ + 5.11))) (eq. 42).
///
/// # Errors
/// As [`sun_position`]; a non-finite ΔT is reported as [`SunError::Time`], an
/// out-of-range pressure (0–2000 hPa) or temperature (−273…100 °C) as
/// [`SunError::Location`].
pub fn sun_position_with(
    time: &DateTime<Utc>,
    lon: f64,
    lat: f64,
    settings: &SpaSettings,
) -> Result<SunPosition, SunError> {
    check_location(0, lon, lat)?;
    let prepared = prepare_with(time, 0, settings.delta_t_s)?;
    let bad = || SunError::Location { index: 0, lon, lat };
    let refraction = match settings.refraction {
        None => None,
        Some((p, t)) => Some(RefractionCorrection::new(p, t).map_err(|_| bad())?),
    };
    let loc = Location {
        latitude: lat,
        longitude: lon,
    };
    let s = prepared
        .at(loc, settings.height_m, refraction)
        .map_err(|_| bad())?;
    Ok(SunPosition {
        elevation_deg: s.elevation_angle(),
        azimuth_deg: s.azimuth().rem_euclid(360.0),
    })
}

/// Sun position, diel phase and local solar hour for one fix.
///
/// # Errors
/// As [`sun_position`].
///
/// # Examples
/// ```
/// use chrono::{TimeZone, Utc};
/// use cairn::geo::sun::{annotate_fix, DielPhase, DielThresholds};
/// // Midnight sun on Svalbard.
/// let t = Utc.with_ymd_and_hms(2023, 6, 21, 0, 0, 0).unwrap();
/// let a = annotate_fix(&t, 15.6, 78.2, &DielThresholds::default()).unwrap();
/// assert_eq!(a.phase, DielPhase::Day);
/// ```
pub fn annotate_fix(
    time: &DateTime<Utc>,
    lon: f64,
    lat: f64,
    thresholds: &DielThresholds,
) -> Result<SunAnnotation, SunError> {
    check_location(0, lon, lat)?;
    Ephemeris::for_sorted(std::slice::from_ref(time), &[0]).annotate(time, lon, lat, thresholds, 0)
}

/// Sun position, diel phase and solar hour for many fixes, in input order.
///
/// The costly, location-free part of SPA runs once per two-hour knot spanned by the
/// data, so the cost per fix is a few hundred nanoseconds whatever the sampling;
/// work is spread over rayon's pool and results do not depend on the thread count.
/// Results are identical to [`annotate_fix`] on each fix.
///
/// # Errors
/// [`SunError::Lengths`] when the columns differ in length; otherwise the error of
/// the first failing fix in input order.
pub fn annotate_fixes(
    times: &[DateTime<Utc>],
    lons: &[f64],
    lats: &[f64],
    thresholds: &DielThresholds,
) -> Result<Vec<SunAnnotation>, SunError> {
    if times.len() != lons.len() || times.len() != lats.len() {
        return Err(SunError::Lengths {
            times: times.len(),
            lons: lons.len(),
            lats: lats.len(),
        });
    }
    let mut order: Vec<usize> = (0..times.len()).collect();
    order.par_sort_by_key(|&i| times[i]);
    let eph = Ephemeris::for_sorted(times, &order);
    let results: Vec<Result<SunAnnotation, SunError>> = (0..times.len())
        .into_par_iter()
        .map(|i| eph.annotate(&times[i], lons[i], lats[i], thresholds, i))
        .collect();
    // Collected sequentially so the error reported is always the first in input order.
    results.into_iter().collect()
}

/// Equation of time (apparent − mean solar time), minutes.
///
/// # Formula
/// Meeus, J. (1998), *Astronomical Algorithms*, 2nd ed., eq. 28.3 (Smart's series)
/// with the low-precision solar coordinates of ch. 25 (eqs. 25.2–25.4, 22.2):
/// E = y sin 2L₀ − 2e sin M + 4ey sin M cos 2L₀ − ½y² sin 4L₀ − 5⁄4 e² sin 2M,
/// y = tan²(ε/2). Error below 3 s of time over 1900–2100 against SPA (tested
/// against the SPA value in the pvlib fixtures).
pub fn equation_of_time_minutes(time: &DateTime<Utc>) -> f64 {
    let jd = time.timestamp() as f64 / 86_400.0
        + f64::from(time.timestamp_subsec_nanos()) * 1e-9 / 86_400.0
        + 2_440_587.5;
    let t = (jd - 2_451_545.0) / 36_525.0;
    let l0 = (280.46646 + t * (36_000.769_83 + t * 0.000_303_2)).to_radians();
    let m = (357.52911 + t * (35_999.050_29 - t * 0.000_153_7)).to_radians();
    let e = 0.016_708_634 - t * (0.000_042_037 + t * 0.000_000_126_7);
    let eps = (23.0 + 26.0 / 60.0 + 21.448 / 3600.0
        - t * (46.8150 + t * (0.00059 - t * 0.001813)) / 3600.0)
        .to_radians();
    let y = (eps / 2.0).tan().powi(2);
    let e_rad = y * (2.0 * l0).sin() - 2.0 * e * m.sin() + 4.0 * e * y * m.sin() * (2.0 * l0).cos()
        - 0.5 * y * y * (4.0 * l0).sin()
        - 1.25 * e * e * (2.0 * m).sin();
    e_rad.to_degrees() * 4.0
}

/// Local apparent solar time at a longitude, hours in [0, 24); 12 is solar noon.
///
/// A cheap stand-alone helper; annotations ([`SunAnnotation::solar_hour`]) take the
/// same quantity from SPA's hour angle instead, which agrees to a few seconds.
///
/// # Formula
/// LAST = UTC + λ/15° + E/60, with E from [`equation_of_time_minutes`]
/// (Meeus 1998, ch. 28), wrapped to [0, 24).
///
/// # Examples
/// ```
/// use chrono::{TimeZone, Utc};
/// use cairn::geo::sun::local_solar_hour;
/// let t = Utc.with_ymd_and_hms(2024, 2, 29, 12, 0, 0).unwrap();
/// // 90° east is six hours ahead; mid-February the sun is about 12 minutes slow.
/// assert!((local_solar_hour(&t, 90.0) - (18.0 - 12.4 / 60.0)).abs() < 0.01);
/// ```
pub fn local_solar_hour(time: &DateTime<Utc>, lon: f64) -> f64 {
    let utc_hours = f64::from(time.num_seconds_from_midnight()) / 3600.0
        + f64::from(time.nanosecond() % 1_000_000_000) * 1e-9 / 3600.0;
    wrap_hours(utc_hours + lon / 15.0 + equation_of_time_minutes(time) / 60.0)
}
