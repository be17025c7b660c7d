//! Validation of the `[covariates]` section: the raw serde structs in, the checked
//! [`CovariateConfig`] out, every error naming its key (and file or column).
//!
//! The per-animal attribute table is read here, not during annotation: it is small, and
//! reading it now lets a missing column or a duplicated id stop the run before any work,
//! and tells which attributes are numeric (and so may be standardised).

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use super::raw::{RawAnimals, RawCovariates, RawDiel, RawRaster, RawSeason, RawStandardise};
use super::{StudyError, invalid, units};
use crate::covariates::config::{
    AnimalTable, Attribute, AttributeValues, CALENDAR_DAYS, CovariateConfig, HourKind, RasterKind,
    RasterLayer, STEP_COLUMNS, SUN_CALENDAR_COLUMNS, SeasonTable, Seasons, calendar_index,
};
use crate::geo::focal::{ClassGroup, Window};
use crate::geo::sun::DielThresholds;

/// Column-safe identifier: a lowercase letter, then lowercase letters, digits or `_`.
fn is_identifier(s: &str) -> bool {
    let mut chars = s.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_lowercase())
        && chars.all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
}

fn check_identifier(key: &str, s: &str) -> Result<(), StudyError> {
    if is_identifier(s) {
        Ok(())
    } else {
        Err(invalid(
            key,
            format!(
                "{s:?} cannot name a column: use lowercase letters, digits and `_`, starting with a letter"
            ),
        ))
    }
}

/// Resolves `[covariates]`; an absent section gives the sun and calendar defaults.
pub(super) fn resolve(
    raw: Option<RawCovariates>,
    root: &Path,
) -> Result<CovariateConfig, StudyError> {
    let raw = raw.unwrap_or_default();
    let hour = match raw.hour.as_deref() {
        None | Some("clock") => HourKind::Clock,
        Some("solar") => HourKind::Solar,
        Some(other) => {
            return Err(invalid(
                "covariates.hour",
                format!("{other:?} is not one of \"clock\", \"solar\""),
            ));
        }
    };
    let thresholds = resolve_diel(raw.diel.as_ref())?;
    let seasons = match &raw.season {
        None => Seasons::Meteorological,
        Some(list) => Seasons::Custom(resolve_seasons(list)?),
    };

    // Every output column name, to catch collisions between layers and attributes.
    let mut taken: BTreeSet<String> = STEP_COLUMNS
        .iter()
        .chain(SUN_CALENDAR_COLUMNS.iter())
        .map(|s| s.to_string())
        .collect();
    let mut claim = |key: &str, col: String| -> Result<(), StudyError> {
        if taken.insert(col.clone()) {
            Ok(())
        } else {
            Err(invalid(
                key,
                format!("column `{col}` would be produced twice; choose another name"),
            ))
        }
    };

    let mut rasters = Vec::with_capacity(raw.raster.len());
    for (i, r) in raw.raster.iter().enumerate() {
        let layer = resolve_raster(i, r, root)?;
        for col in layer.columns() {
            claim(&format!("covariates.raster[{i}].name"), col)?;
        }
        rasters.push(layer);
    }
    let animals = match &raw.animals {
        None => None,
        Some(a) => {
            let table = resolve_animals(a, root)?;
            for at in &table.attributes {
                claim("covariates.animals.columns", at.name.clone())?;
            }
            Some(table)
        }
    };

    // Standardisable: raster values and class proportions, numeric attributes, and the
    // sun's elevation. Cyclic terms are bounded already, and nodata fractions are a
    // quality measure, not a covariate.
    let mut numeric: Vec<String> = vec!["sun_elevation_deg".to_string()];
    numeric.extend(rasters.iter().flat_map(RasterLayer::numeric_covariates));
    if let Some(t) = &animals {
        numeric.extend(
            t.attributes
                .iter()
                .filter(|a| matches!(a.values, AttributeValues::Numeric(_)))
                .map(|a| a.name.clone()),
        );
    }
    let standardise = match raw.standardise {
        None | Some(RawStandardise::All(false)) => Vec::new(),
        Some(RawStandardise::All(true)) => numeric,
        Some(RawStandardise::Columns(cols)) => {
            let mut seen = BTreeSet::new();
            for c in &cols {
                if !numeric.contains(c) {
                    return Err(invalid(
                        "covariates.standardise",
                        format!(
                            "`{c}` is not a numeric covariate of this study; standardisable columns: {}",
                            numeric.join(", ")
                        ),
                    ));
                }
                if !seen.insert(c.as_str()) {
                    return Err(invalid(
                        "covariates.standardise",
                        format!("`{c}` is listed twice"),
                    ));
                }
            }
            // Output order follows the columns, not the list.
            numeric.into_iter().filter(|n| cols.contains(n)).collect()
        }
    };
    for c in &standardise {
        claim("covariates.standardise", format!("{c}_z"))?;
    }

    Ok(CovariateConfig {
        hour,
        thresholds,
        seasons,
        rasters,
        animals,
        standardise,
    })
}

/// A sun elevation such as `"-6 deg"` → degrees in (−90, 90).
fn parse_elevation(key: &str, text: &str) -> Result<f64, StudyError> {
    let t = text.trim();
    let (num, unit) = match t.find(|c: char| c.is_ascii_alphabetic() || c == '°') {
        Some(cut) => t.split_at(cut),
        None => (t, ""),
    };
    let bad = |reason: &str| StudyError::Quantity {
        key: key.to_string(),
        value: text.to_string(),
        reason: reason.to_string(),
    };
    if !matches!(unit.trim(), "deg" | "degree" | "degrees" | "°") {
        return Err(bad("give the unit explicitly: deg"));
    }
    let v: f64 = num
        .trim()
        .parse()
        .map_err(|_| bad("it does not start with a number"))?;
    if !(v.is_finite() && v.abs() < 90.0) {
        return Err(bad("a sun elevation must lie in (-90, 90) degrees"));
    }
    Ok(v)
}

fn resolve_diel(raw: Option<&RawDiel>) -> Result<DielThresholds, StudyError> {
    let Some(d) = raw else {
        return Ok(DielThresholds::default());
    };
    let def = DielThresholds::default();
    let get = |key: &str, v: &Option<String>, default: f64| match v {
        Some(s) => parse_elevation(&format!("covariates.diel.{key}"), s),
        None => Ok(default),
    };
    let day = get("day", &d.day, def.day())?;
    let civil = get("civil", &d.civil, def.civil())?;
    let nautical = get("nautical", &d.nautical, def.nautical())?;
    let astronomical = get("astronomical", &d.astronomical, def.astronomical())?;
    DielThresholds::new(day, civil, nautical, astronomical)
        .map_err(|e| invalid("covariates.diel", e.to_string()))
}

fn parse_month_day(key: &str, s: &str) -> Result<(u32, u32, usize), StudyError> {
    let bad = || {
        invalid(
            key,
            format!("{s:?} is not a date written \"MM-DD\" (e.g. \"12-01\")"),
        )
    };
    let (m, d) = s.trim().split_once('-').ok_or_else(bad)?;
    if m.len() != 2 || d.len() != 2 {
        return Err(bad());
    }
    let month: u32 = m.parse().map_err(|_| bad())?;
    let day: u32 = d.parse().map_err(|_| bad())?;
    let idx = calendar_index(month, day).ok_or_else(bad)?;
    Ok((month, day, idx))
}

fn day_name(idx: usize) -> String {
    use chrono::Datelike;
    let d = chrono::NaiveDate::from_yo_opt(2000, idx as u32 + 1).expect("leap-year day");
    format!("{:02}-{:02}", d.month(), d.day())
}

/// Seasons cover the 365 common days exactly once; 29 February, when no season names
/// it, goes with 28 February (so "12-01".."02-28" then "03-01".. is complete).
fn resolve_seasons(list: &[RawSeason]) -> Result<SeasonTable, StudyError> {
    const KEY: &str = "covariates.season";
    const FEB_29: usize = 59;
    if list.len() < 2 {
        return Err(invalid(
            KEY,
            "define at least two seasons, or leave the section out for meteorological seasons",
        ));
    }
    if list.len() > u8::MAX as usize {
        return Err(invalid(KEY, "at most 255 seasons"));
    }
    let mut owner: Vec<Option<usize>> = vec![None; CALENDAR_DAYS];
    let mut names: Vec<String> = Vec::with_capacity(list.len());
    for (i, s) in list.iter().enumerate() {
        let name = s.name.trim();
        if name.is_empty() {
            return Err(invalid(
                &format!("{KEY}[{i}].name"),
                "give the season a name",
            ));
        }
        if names.iter().any(|n| n == name) {
            return Err(invalid(
                &format!("{KEY}[{i}].name"),
                format!("season {name:?} is defined twice; give each range its own name"),
            ));
        }
        let (_, _, from) = parse_month_day(&format!("{KEY}[{i}].from"), &s.from)?;
        let (_, _, to) = parse_month_day(&format!("{KEY}[{i}].to"), &s.to)?;
        // Inclusive range, wrapping past 31 December when `to` comes before `from`.
        let len = if to >= from {
            to - from + 1
        } else {
            CALENDAR_DAYS - from + to + 1
        };
        for k in 0..len {
            let day = (from + k) % CALENDAR_DAYS;
            if let Some(j) = owner[day] {
                return Err(invalid(
                    &format!("{KEY}[{i}]"),
                    format!(
                        "season {name:?} ({}..{}) overlaps season {:?} on {}; every day must belong to exactly one season",
                        s.from,
                        s.to,
                        names[j],
                        day_name(day)
                    ),
                ));
            }
            owner[day] = Some(i);
        }
        names.push(name.to_string());
    }
    if owner[FEB_29].is_none() {
        owner[FEB_29] = owner[FEB_29 - 1];
    }
    let uncovered: Vec<String> = (0..CALENDAR_DAYS)
        .filter(|&d| owner[d].is_none())
        .map(day_name)
        .collect();
    if !uncovered.is_empty() {
        let shown: Vec<&str> = uncovered.iter().take(5).map(String::as_str).collect();
        return Err(invalid(
            KEY,
            format!(
                "{} day(s) belong to no season (first: {}); every day must belong to exactly one season",
                uncovered.len(),
                shown.join(", ")
            ),
        ));
    }
    Ok(SeasonTable {
        names,
        by_day: owner
            .into_iter()
            .map(|o| o.expect("covered") as u8)
            .collect(),
    })
}

fn resolve_raster(i: usize, r: &RawRaster, root: &Path) -> Result<RasterLayer, StudyError> {
    let key = |k: &str| format!("covariates.raster[{i}].{k}");
    check_identifier(&key("name"), &r.name)?;
    let path = root.join(&r.file);
    if !path.is_file() {
        return Err(invalid(
            &key("file"),
            format!("raster file {} does not exist", path.display()),
        ));
    }
    let not_for = |k: &str, given: bool, kind: &str| -> Result<(), StudyError> {
        if given {
            Err(invalid(
                &key(k),
                format!("not used by kind = {kind:?}; remove it"),
            ))
        } else {
            Ok(())
        }
    };
    let kind = match r.kind.as_str() {
        "classes" => {
            not_for("unit", r.unit.is_some(), "classes")?;
            not_for("scale", r.scale.is_some(), "classes")?;
            not_for("label", r.label.is_some(), "classes")?;
            let radius_m = match &r.radius {
                Some(s) => units::parse_distance(&key("radius"), s)?,
                None => {
                    return Err(invalid(
                        &key("radius"),
                        "required for kind = \"classes\": the window radius, e.g. \"500 m\"",
                    ));
                }
            };
            let window = match r.window.as_deref() {
                None | Some("circle") => Window::Circle,
                Some("square") => Window::Square,
                Some(other) => {
                    return Err(invalid(
                        &key("window"),
                        format!("{other:?} is not one of \"circle\", \"square\""),
                    ));
                }
            };
            let classes = match &r.classes {
                Some(c) if !c.is_empty() => c,
                _ => {
                    return Err(invalid(
                        &key("classes"),
                        "required for kind = \"classes\": a table of group name → class codes, e.g. { kelp = [1], rock = [2, 3] }",
                    ));
                }
            };
            if classes.len() > 63 {
                return Err(invalid(&key("classes"), "at most 63 class groups"));
            }
            let mut seen: BTreeMap<i64, &str> = BTreeMap::new();
            let mut groups = Vec::with_capacity(classes.len());
            for (g, codes) in classes {
                check_identifier(&format!("{}.{g}", key("classes")), g)?;
                if codes.is_empty() {
                    return Err(invalid(
                        &format!("{}.{g}", key("classes")),
                        "lists no class codes",
                    ));
                }
                for &c in codes {
                    if let Some(other) = seen.insert(c, g) {
                        return Err(invalid(
                            &format!("{}.{g}", key("classes")),
                            format!(
                                "class code {c} is also in group `{other}`; a code belongs to one group"
                            ),
                        ));
                    }
                }
                groups.push(ClassGroup::new(g.clone(), codes.clone()));
            }
            RasterKind::Classes {
                radius_m,
                window,
                groups,
            }
        }
        "value" => {
            not_for("radius", r.radius.is_some(), "value")?;
            not_for("window", r.window.is_some(), "value")?;
            not_for("classes", r.classes.is_some(), "value")?;
            let unit = match r.unit.as_deref().map(str::trim) {
                Some(u) if !u.is_empty() => u.to_string(),
                _ => {
                    return Err(invalid(
                        &key("unit"),
                        "required for kind = \"value\": the unit of the (scaled) values, e.g. \"m\"",
                    ));
                }
            };
            let scale = r.scale.unwrap_or(1.0);
            if !(scale.is_finite() && scale != 0.0) {
                return Err(invalid(
                    &key("scale"),
                    format!("{scale} is not a finite, non-zero factor"),
                ));
            }
            RasterKind::Value {
                unit,
                scale,
                label: r.label.clone(),
            }
        }
        other => {
            return Err(invalid(
                &key("kind"),
                format!("{other:?} is not one of \"classes\", \"value\""),
            ));
        }
    };
    Ok(RasterLayer {
        name: r.name.clone(),
        file: r.file.clone(),
        path,
        kind,
    })
}

fn resolve_animals(a: &RawAnimals, root: &Path) -> Result<AnimalTable, StudyError> {
    const KEY: &str = "covariates.animals";
    let path = root.join(&a.file);
    if !path.is_file() {
        return Err(invalid(
            &format!("{KEY}.file"),
            format!("animal table {} does not exist", path.display()),
        ));
    }
    let read_err = |reason: String| StudyError::Header {
        path: path.clone(),
        reason,
    };
    let text = std::fs::read_to_string(&path).map_err(|e| read_err(e.to_string()))?;
    let mut lines = text.lines();
    let split = |l: &str| -> Vec<String> {
        l.split(',')
            .map(|c| c.trim().trim_matches('"').to_string())
            .collect()
    };
    let header: Vec<String> = match lines.next() {
        Some(h) => split(h.trim_start_matches('\u{feff}')),
        None => return Err(read_err("the file is empty".into())),
    };
    let find = |key: &str, col: &str| -> Result<usize, StudyError> {
        header.iter().position(|h| h == col).ok_or_else(|| {
            invalid(
                key,
                format!(
                    "column `{col}` is not in {} (it has: {})",
                    path.display(),
                    header.join(", ")
                ),
            )
        })
    };
    let id_at = find(&format!("{KEY}.id"), &a.id)?;
    let mut at = Vec::with_capacity(a.columns.len());
    for c in &a.columns {
        check_identifier(&format!("{KEY}.columns"), c)?;
        if c == &a.id {
            return Err(invalid(
                &format!("{KEY}.columns"),
                format!("`{c}` is the id column"),
            ));
        }
        at.push(find(&format!("{KEY}.columns"), c)?);
    }
    let mut ids = Vec::new();
    let mut cells: Vec<Vec<Option<String>>> = vec![Vec::new(); at.len()];
    for (n, line) in lines.enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let row = n + 1; // data row, 1-based, header not counted
        let f = split(line);
        if f.len() != header.len() {
            return Err(read_err(format!(
                "data row {row} has {} fields, the header {}; the table is read as plain comma-separated text without quoted commas",
                f.len(),
                header.len()
            )));
        }
        let id = f[id_at].clone();
        if id.is_empty() {
            return Err(read_err(format!(
                "data row {row}: empty id in column `{}`",
                a.id
            )));
        }
        if ids.contains(&id) {
            return Err(read_err(format!(
                "data row {row}: animal {id:?} appears twice in column `{}`",
                a.id
            )));
        }
        ids.push(id);
        for (k, &j) in at.iter().enumerate() {
            let v = &f[j];
            cells[k].push((!v.is_empty()).then(|| v.clone()));
        }
    }
    let attributes = a
        .columns
        .iter()
        .zip(cells)
        .map(|(name, col)| {
            let parsed: Option<Vec<Option<f64>>> = col
                .iter()
                .map(|v| match v {
                    None => Some(None),
                    Some(s) => s.parse::<f64>().ok().filter(|x| x.is_finite()).map(Some),
                })
                .collect();
            let any = col.iter().any(Option::is_some);
            let values = match parsed {
                Some(nums) if any => AttributeValues::Numeric(nums),
                _ => AttributeValues::Text(col),
            };
            Attribute {
                name: name.clone(),
                values,
            }
        })
        .collect();
    Ok(AnimalTable {
        path,
        id_column: a.id.clone(),
        ids,
        attributes,
    })
}
