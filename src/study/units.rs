//! Quantities with units, as written in the study file.
//!
//! The study file states every physical setting with its unit (`"6 h"`, `"2 m/s"`,
//! `"500 m"`), so that nobody has to remember which unit a bare number meant. This module
//! parses such strings into SI values (seconds, metres per second, metres); a missing or
//! unknown unit is an error that names the key and lists the accepted units.

use super::StudyError;

/// Parses `"<number> <unit>"` (space optional) into `(number, unit)`.
fn split_quantity(key: &str, text: &str) -> Result<(f64, String), StudyError> {
    let t = text.trim();
    let cut = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.' || c == '-' || c == '+' || c == 'e'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(cut);
    let value: f64 = num.trim().parse().map_err(|_| StudyError::Quantity {
        key: key.to_string(),
        value: text.to_string(),
        reason: "it does not start with a number".to_string(),
    })?;
    if !value.is_finite() {
        return Err(StudyError::Quantity {
            key: key.to_string(),
            value: text.to_string(),
            reason: "the number is not finite".to_string(),
        });
    }
    Ok((value, unit.trim().to_ascii_lowercase()))
}

fn unit_error(key: &str, text: &str, accepted: &str) -> StudyError {
    StudyError::Quantity {
        key: key.to_string(),
        value: text.to_string(),
        reason: format!("give the unit explicitly, one of: {accepted}"),
    }
}

/// A duration such as `"90 min"`, `"6 h"`, `"1.5 d"` → seconds (must be > 0).
pub(crate) fn parse_duration(key: &str, text: &str) -> Result<f64, StudyError> {
    const ACCEPTED: &str = "s, min, h, d";
    let (v, unit) = split_quantity(key, text)?;
    let factor = match unit.as_str() {
        "s" | "sec" | "second" | "seconds" => 1.0,
        "min" | "minute" | "minutes" => 60.0,
        "h" | "hr" | "hour" | "hours" => 3600.0,
        "d" | "day" | "days" => 86_400.0,
        _ => return Err(unit_error(key, text, ACCEPTED)),
    };
    positive(key, text, v * factor)
}

/// A speed such as `"2 m/s"`, `"7.2 km/h"`, `"4 kn"` → metres per second (must be > 0).
pub(crate) fn parse_speed(key: &str, text: &str) -> Result<f64, StudyError> {
    const ACCEPTED: &str = "m/s, km/h, kn";
    let (v, unit) = split_quantity(key, text)?;
    let factor = match unit.as_str() {
        "m/s" => 1.0,
        "km/h" | "kmh" | "kph" => 1000.0 / 3600.0,
        // The international knot is exactly 1852 m per hour (by definition).
        "kn" | "kt" | "knot" | "knots" => 1852.0 / 3600.0,
        _ => return Err(unit_error(key, text, ACCEPTED)),
    };
    positive(key, text, v * factor)
}

/// A distance such as `"2500 m"` or `"2.5 km"` → metres (must be > 0).
pub(crate) fn parse_distance(key: &str, text: &str) -> Result<f64, StudyError> {
    const ACCEPTED: &str = "m, km";
    let (v, unit) = split_quantity(key, text)?;
    let factor = match unit.as_str() {
        "m" | "metre" | "metres" | "meter" | "meters" => 1.0,
        "km" => 1000.0,
        _ => return Err(unit_error(key, text, ACCEPTED)),
    };
    positive(key, text, v * factor)
}

/// An angle such as `"15 deg"` → degrees (must lie in (0, 180]).
pub(crate) fn parse_angle_deg(key: &str, text: &str) -> Result<f64, StudyError> {
    const ACCEPTED: &str = "deg";
    let (v, unit) = split_quantity(key, text)?;
    match unit.as_str() {
        "deg" | "degree" | "degrees" | "°" => {}
        _ => return Err(unit_error(key, text, ACCEPTED)),
    }
    if v <= 0.0 || v > 180.0 {
        return Err(StudyError::Quantity {
            key: key.to_string(),
            value: text.to_string(),
            reason: "an angle limit must lie in (0, 180] degrees".to_string(),
        });
    }
    Ok(v)
}

fn positive(key: &str, text: &str, v: f64) -> Result<f64, StudyError> {
    if v > 0.0 {
        Ok(v)
    } else {
        Err(StudyError::Quantity {
            key: key.to_string(),
            value: text.to_string(),
            reason: "it must be greater than zero".to_string(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_convert_to_seconds() {
        assert_eq!(parse_duration("k", "6 h").unwrap(), 21_600.0);
        assert_eq!(parse_duration("k", "90min").unwrap(), 5_400.0);
        assert_eq!(parse_duration("k", "1.5 d").unwrap(), 129_600.0);
        assert!(parse_duration("k", "6").is_err());
        assert!(parse_duration("k", "-1 h").is_err());
        assert!(parse_duration("k", "h").is_err());
    }

    #[test]
    fn speeds_convert_to_metres_per_second() {
        assert_eq!(parse_speed("k", "2 m/s").unwrap(), 2.0);
        assert!((parse_speed("k", "7.2 km/h").unwrap() - 2.0).abs() < 1e-12);
        // 1 kn = 1852 m / 3600 s exactly (international nautical mile, by definition).
        assert!((parse_speed("k", "1 kn").unwrap() - 0.514_444_444).abs() < 1e-9);
        assert!(parse_speed("k", "2 mph").is_err());
    }

    #[test]
    fn distances_and_angles() {
        assert_eq!(parse_distance("k", "2.5 km").unwrap(), 2500.0);
        assert_eq!(parse_angle_deg("k", "15 deg").unwrap(), 15.0);
        assert!(parse_angle_deg("k", "200 deg").is_err());
    }
}
