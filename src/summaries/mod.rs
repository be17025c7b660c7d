//! Derived tables from a decoded step table: activity budgets, hotspot grids of
//! state-days, per-animal tables and residual diagnostics.
//!
//! Everything here starts from [`Decoded`], the validated, columnar form of the
//! decoded steps (one row per fix: animal, time, position, local hour, diel phase,
//! sun elevation, season, Viterbi state, local state probabilities, step length and
//! turning angle). [`DecodedColumns`] is the raw input; [`Decoded::new`] checks it once
//! (lengths, ranges, probability rows, time order within each animal) so the summary
//! functions never re-validate. Animals and seasons are interned to small integer
//! indices so that the hot loops over 10^6 steps touch only numeric columns.
//!
//! Two ways of counting time in a state are offered wherever it matters
//! ([`CountMethod`]): the Viterbi path (each step belongs wholly to one state) and the
//! local state probabilities (each step contributes its probability to every state).
//! Every result records which one produced it.

pub mod animals;
pub mod association;
pub mod budgets;
pub mod diagnostics;
pub mod hotspots;
pub mod occupancy;
mod rng;

use serde::Serialize;
use std::collections::HashMap;
use std::ops::Range;

/// Tolerances used across the summaries, kept in one place.
pub mod prec {
    /// How far a row of local state probabilities may sum from 1 before it is
    /// rejected: decoders that work in log space and exponentiate at the end leave
    /// rounding of this order on 10^6-step series.
    pub const PROBABILITY_ROW_SUM: f64 = 1e-6;
}

/// Errors raised while validating a decoded table or computing a summary.
#[derive(Debug, thiserror::Error)]
pub enum SummaryError {
    /// A column has a different number of rows from the `animal` column.
    #[error(
        "column `{column}` has {found} rows but `animal` has {expected}; all columns of the decoded table must have one row per step"
    )]
    ColumnLength {
        /// Column name.
        column: &'static str,
        /// Rows expected.
        expected: usize,
        /// Rows found.
        found: usize,
    },
    /// A value lies outside its documented range.
    #[error("row {row}, column `{column}`: value {value} is outside {range}")]
    OutOfRange {
        /// Column name.
        column: &'static str,
        /// Zero-based row.
        row: usize,
        /// Offending value.
        value: f64,
        /// Allowed range, as text.
        range: &'static str,
    },
    /// A row of local state probabilities does not sum to one.
    #[error(
        "row {row}: local state probabilities sum to {sum}, not 1 (tolerance {tol}); pass the decoder's normalised probabilities"
    )]
    ProbabilityRow {
        /// Zero-based row.
        row: usize,
        /// Row sum found.
        sum: f64,
        /// Tolerance applied.
        tol: f64,
    },
    /// Rows of one animal are not contiguous, or times within an animal do not increase.
    #[error("row {row}, animal `{animal}`: {problem}; sort the decoded table by animal, then time")]
    Order {
        /// Zero-based row.
        row: usize,
        /// Animal identifier.
        animal: String,
        /// What is wrong.
        problem: &'static str,
    },
    /// The table has no rows or no states.
    #[error("the decoded table is empty ({0}); nothing to summarise")]
    Empty(&'static str),
    /// The probability method was asked for but the table carries no probabilities.
    #[error(
        "local state probabilities were not supplied; use CountMethod::Viterbi or pass the decoder's probabilities"
    )]
    ProbabilitiesMissing,
    /// A summary option is invalid.
    #[error("option `{name}`: {problem}")]
    Option {
        /// Option name.
        name: &'static str,
        /// What is wrong and what to do.
        problem: String,
    },
    /// Writing an output failed.
    #[error("writing {what}: {source}")]
    Io {
        /// What was being written.
        what: &'static str,
        /// Underlying error.
        #[source]
        source: std::io::Error,
    },
}

impl SummaryError {
    pub(crate) fn option(name: &'static str, problem: impl Into<String>) -> Self {
        SummaryError::Option {
            name,
            problem: problem.into(),
        }
    }
    pub(crate) fn io(what: &'static str) -> impl FnOnce(std::io::Error) -> Self {
        move |source| SummaryError::Io { what, source }
    }
}

/// Diel phase of a fix; dawn and dusk are the twilight before sunrise and after sunset.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
pub enum DielPhase {
    /// Sun above the horizon.
    Day,
    /// Twilight before sunrise.
    Dawn,
    /// Twilight after sunset.
    Dusk,
    /// Sun below the twilight threshold.
    Night,
}

impl DielPhase {
    /// All phases in table order (dawn, day, dusk, night: the order they occur in a day).
    pub const ALL: [DielPhase; 4] = [
        DielPhase::Dawn,
        DielPhase::Day,
        DielPhase::Dusk,
        DielPhase::Night,
    ];

    /// Lower-case name used in tables and figures.
    pub fn as_str(self) -> &'static str {
        match self {
            DielPhase::Day => "day",
            DielPhase::Dawn => "dawn",
            DielPhase::Dusk => "dusk",
            DielPhase::Night => "night",
        }
    }

    /// Position in [`DielPhase::ALL`].
    pub(crate) fn index(self) -> usize {
        match self {
            DielPhase::Dawn => 0,
            DielPhase::Day => 1,
            DielPhase::Dusk => 2,
            DielPhase::Night => 3,
        }
    }
}

/// How time in a state is counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum CountMethod {
    /// Each step counts wholly for its Viterbi state.
    Viterbi,
    /// Each step counts its local (smoothed) probability for every state.
    LocalProbabilities,
}

impl CountMethod {
    /// Name used in tables.
    pub fn as_str(self) -> &'static str {
        match self {
            CountMethod::Viterbi => "viterbi",
            CountMethod::LocalProbabilities => "local_probabilities",
        }
    }
}

/// The raw decoded step table as handed over by the decoder: plain columns, one row
/// per fix, rows sorted by animal then time. Validate with [`Decoded::new`].
#[derive(Debug, Clone, Default)]
pub struct DecodedColumns {
    /// State labels, in state-index order.
    pub state_labels: Vec<String>,
    /// Animal identifier per row.
    pub animal: Vec<String>,
    /// UTC time, microseconds since 1970-01-01T00:00:00Z.
    pub time_us: Vec<i64>,
    /// Longitude, degrees east (WGS84), in [-180, 180].
    pub lon: Vec<f64>,
    /// Latitude, degrees north (WGS84), in [-90, 90].
    pub lat: Vec<f64>,
    /// Local hour (clock or solar, as chosen upstream), in [0, 24).
    pub local_hour: Vec<f64>,
    /// Diel phase.
    pub diel: Vec<DielPhase>,
    /// Sun elevation, degrees, at the fix.
    pub sun_elevation_deg: Vec<f64>,
    /// Season label per row.
    pub season: Vec<String>,
    /// Optional order of season labels for tables and figures; labels not listed
    /// follow in order of first appearance. Empty: order of first appearance.
    pub season_order: Vec<String>,
    /// Viterbi state index per row.
    pub viterbi: Vec<usize>,
    /// Local state probabilities, row-major T×N; empty when not available.
    pub probabilities: Vec<f64>,
    /// Step length to the next fix, metres; NaN where undefined.
    pub step_m: Vec<f64>,
    /// Turning angle, radians in [-π, π]; NaN where undefined.
    pub angle_rad: Vec<f64>,
}

/// A validated decoded step table (see [`DecodedColumns`] for the meaning of the
/// columns). Fields are private so that the invariants checked by [`Decoded::new`]
/// hold everywhere downstream.
#[derive(Debug, Clone)]
pub struct Decoded {
    state_labels: Vec<String>,
    animal_ids: Vec<String>,
    animal: Vec<u32>,
    animal_rows: Vec<Range<usize>>,
    time_us: Vec<i64>,
    interval_s: Vec<f64>,
    lon: Vec<f64>,
    lat: Vec<f64>,
    local_hour: Vec<f64>,
    diel: Vec<DielPhase>,
    sun_elevation_deg: Vec<f64>,
    season_labels: Vec<String>,
    season: Vec<u16>,
    viterbi: Vec<u16>,
    probabilities: Vec<f64>,
    step_m: Vec<f64>,
    angle_rad: Vec<f64>,
}

fn check_len(column: &'static str, expected: usize, found: usize) -> Result<(), SummaryError> {
    if expected == found {
        Ok(())
    } else {
        Err(SummaryError::ColumnLength {
            column,
            expected,
            found,
        })
    }
}

fn check_range(
    column: &'static str,
    values: &[f64],
    ok: impl Fn(f64) -> bool,
    range: &'static str,
) -> Result<(), SummaryError> {
    match values.iter().position(|&v| !ok(v)) {
        None => Ok(()),
        Some(row) => Err(SummaryError::OutOfRange {
            column,
            row,
            value: values[row],
            range,
        }),
    }
}

impl Decoded {
    /// Validate the raw columns.
    ///
    /// # Errors
    /// [`SummaryError`] naming the column and row of the first problem: unequal
    /// column lengths, values out of range, probability rows not summing to one,
    /// rows of an animal not contiguous or times not strictly increasing.
    ///
    /// # Examples
    /// ```
    /// use cairn::summaries::{Decoded, DecodedColumns, DielPhase};
    /// let cols = DecodedColumns {
    ///     state_labels: vec!["rest".into(), "travel".into()],
    ///     animal: vec!["a".into(), "a".into()],
    ///     time_us: vec![0, 3_600_000_000],
    ///     lon: vec![10.0, 10.01],
    ///     lat: vec![50.0, 50.0],
    ///     local_hour: vec![0.5, 1.5],
    ///     diel: vec![DielPhase::Night; 2],
    ///     sun_elevation_deg: vec![-30.0, -28.0],
    ///     season: vec!["winter".into(); 2],
    ///     viterbi: vec![0, 1],
    ///     probabilities: vec![0.9, 0.1, 0.2, 0.8],
    ///     step_m: vec![716.0, f64::NAN],
    ///     angle_rad: vec![f64::NAN, f64::NAN],
    ///     ..Default::default()
    /// };
    /// let d = Decoded::new(cols).unwrap();
    /// assert_eq!(d.n_steps(), 2);
    /// ```
    pub fn new(c: DecodedColumns) -> Result<Self, SummaryError> {
        let t = c.animal.len();
        let n = c.state_labels.len();
        if t == 0 {
            return Err(SummaryError::Empty("no rows"));
        }
        if n == 0 {
            return Err(SummaryError::Empty("no state labels"));
        }
        if n > u16::MAX as usize {
            return Err(SummaryError::option(
                "state_labels",
                "more than 65535 states",
            ));
        }
        check_len("time_us", t, c.time_us.len())?;
        check_len("lon", t, c.lon.len())?;
        check_len("lat", t, c.lat.len())?;
        check_len("local_hour", t, c.local_hour.len())?;
        check_len("diel", t, c.diel.len())?;
        check_len("sun_elevation_deg", t, c.sun_elevation_deg.len())?;
        check_len("season", t, c.season.len())?;
        check_len("viterbi", t, c.viterbi.len())?;
        check_len("step_m", t, c.step_m.len())?;
        check_len("angle_rad", t, c.angle_rad.len())?;
        if !c.probabilities.is_empty() {
            check_len("probabilities (T×N)", t * n, c.probabilities.len())?;
        }
        check_range(
            "lon",
            &c.lon,
            |v| (-180.0..=180.0).contains(&v),
            "[-180, 180]",
        )?;
        check_range("lat", &c.lat, |v| (-90.0..=90.0).contains(&v), "[-90, 90]")?;
        check_range(
            "local_hour",
            &c.local_hour,
            |v| (0.0..24.0).contains(&v),
            "[0, 24)",
        )?;
        check_range(
            "sun_elevation_deg",
            &c.sun_elevation_deg,
            |v| (-90.0..=90.0).contains(&v),
            "[-90, 90]",
        )?;
        check_range(
            "step_m",
            &c.step_m,
            |v| v.is_nan() || v >= 0.0,
            "[0, ∞) or NaN",
        )?;
        check_range(
            "angle_rad",
            &c.angle_rad,
            |v| v.is_nan() || (-std::f64::consts::PI..=std::f64::consts::PI).contains(&v),
            "[-π, π] or NaN",
        )?;
        if let Some(row) = c.viterbi.iter().position(|&s| s >= n) {
            return Err(SummaryError::OutOfRange {
                column: "viterbi",
                row,
                value: c.viterbi[row] as f64,
                range: "[0, number of states)",
            });
        }
        for (row, p) in c.probabilities.chunks_exact(n).enumerate() {
            if let Some(&v) = p.iter().find(|v| !(0.0..=1.0).contains(*v)) {
                return Err(SummaryError::OutOfRange {
                    column: "probabilities",
                    row,
                    value: v,
                    range: "[0, 1]",
                });
            }
            let sum: f64 = p.iter().sum();
            if (sum - 1.0).abs() > prec::PROBABILITY_ROW_SUM {
                return Err(SummaryError::ProbabilityRow {
                    row,
                    sum,
                    tol: prec::PROBABILITY_ROW_SUM,
                });
            }
        }

        // Intern animals; rows of one animal must be one contiguous block so that
        // per-animal work (intervals, bootstrap units) is a slice.
        let mut animal_ids: Vec<String> = Vec::new();
        let mut animal = Vec::with_capacity(t);
        let mut animal_rows: Vec<Range<usize>> = Vec::new();
        let mut seen: HashMap<&str, u32> = HashMap::new();
        for (row, id) in c.animal.iter().enumerate() {
            let same = row > 0 && c.animal[row - 1] == *id;
            if !same {
                if seen.contains_key(id.as_str()) {
                    return Err(SummaryError::Order {
                        row,
                        animal: id.clone(),
                        problem: "rows of this animal are not contiguous",
                    });
                }
                let k = animal_ids.len() as u32;
                seen.insert(id.as_str(), k);
                animal_ids.push(id.clone());
                animal_rows.push(row..row);
            } else if c.time_us[row] <= c.time_us[row - 1] {
                return Err(SummaryError::Order {
                    row,
                    animal: id.clone(),
                    problem: "time does not increase",
                });
            }
            let k = animal_ids.len() - 1;
            animal_rows[k].end = row + 1;
            animal.push(k as u32);
        }

        // Seasons: the given order first, then labels in order of first appearance.
        let mut season_labels: Vec<String> = Vec::new();
        let mut season_index: HashMap<String, u16> = HashMap::new();
        for label in c.season_order.iter().chain(c.season.iter()) {
            if !season_index.contains_key(label) {
                if season_labels.len() >= u16::MAX as usize {
                    return Err(SummaryError::option("season", "more than 65535 labels"));
                }
                season_index.insert(label.clone(), season_labels.len() as u16);
                season_labels.push(label.clone());
            }
        }
        let season: Vec<u16> = c.season.iter().map(|s| season_index[s]).collect();

        let interval_s = intervals(&c.time_us, &animal_rows);
        let viterbi = c.viterbi.iter().map(|&s| s as u16).collect();
        Ok(Decoded {
            state_labels: c.state_labels,
            animal_ids,
            animal,
            animal_rows,
            time_us: c.time_us,
            interval_s,
            lon: c.lon,
            lat: c.lat,
            local_hour: c.local_hour,
            diel: c.diel,
            sun_elevation_deg: c.sun_elevation_deg,
            season_labels,
            season,
            viterbi,
            probabilities: c.probabilities,
            step_m: c.step_m,
            angle_rad: c.angle_rad,
        })
    }

    /// Number of rows (fixes).
    pub fn n_steps(&self) -> usize {
        self.animal.len()
    }
    /// Number of states.
    pub fn n_states(&self) -> usize {
        self.state_labels.len()
    }
    /// State labels in state-index order.
    pub fn state_labels(&self) -> &[String] {
        &self.state_labels
    }
    /// Animal identifiers in order of first appearance.
    pub fn animal_ids(&self) -> &[String] {
        &self.animal_ids
    }
    /// Rows of each animal (same order as [`Decoded::animal_ids`]).
    pub fn animal_rows(&self) -> &[Range<usize>] {
        &self.animal_rows
    }
    /// Season labels in table order.
    pub fn season_labels(&self) -> &[String] {
        &self.season_labels
    }
    /// Longitudes.
    pub fn lon(&self) -> &[f64] {
        &self.lon
    }
    /// Latitudes.
    pub fn lat(&self) -> &[f64] {
        &self.lat
    }
    /// Viterbi states.
    pub fn viterbi(&self) -> impl ExactSizeIterator<Item = usize> + '_ {
        self.viterbi.iter().map(|&s| s as usize)
    }
    /// Step lengths, metres.
    pub fn step_m(&self) -> &[f64] {
        &self.step_m
    }
    /// Turning angles, radians.
    pub fn angle_rad(&self) -> &[f64] {
        &self.angle_rad
    }
    /// UTC times, microseconds.
    pub fn time_us(&self) -> &[i64] {
        &self.time_us
    }
    /// Whether local state probabilities were supplied.
    pub fn has_probabilities(&self) -> bool {
        !self.probabilities.is_empty()
    }

    /// Seconds from each fix to the next fix of the same animal; the last fix of an
    /// animal gets the animal's median interval (0 for a single-fix animal), so every
    /// fix stands for one sampling interval of time.
    pub fn interval_s(&self) -> &[f64] {
        &self.interval_s
    }

    pub(crate) fn ensure_method(&self, method: CountMethod) -> Result<(), SummaryError> {
        if method == CountMethod::LocalProbabilities && !self.has_probabilities() {
            Err(SummaryError::ProbabilitiesMissing)
        } else {
            Ok(())
        }
    }

    /// Add the state weights of row `i` (1 for the Viterbi state, or the local
    /// probabilities) times `scale` into `acc` (length N).
    #[inline]
    pub(crate) fn add_weights(&self, i: usize, method: CountMethod, scale: f64, acc: &mut [f64]) {
        match method {
            CountMethod::Viterbi => acc[self.viterbi[i] as usize] += scale,
            CountMethod::LocalProbabilities => {
                let n = self.state_labels.len();
                for (a, p) in acc.iter_mut().zip(&self.probabilities[i * n..(i + 1) * n]) {
                    *a += p * scale;
                }
            }
        }
    }

    /// Weight of state `s` at row `i`.
    #[inline]
    pub(crate) fn weight(&self, i: usize, s: usize, method: CountMethod) -> f64 {
        match method {
            CountMethod::Viterbi => f64::from(u8::from(self.viterbi[i] as usize == s)),
            CountMethod::LocalProbabilities => self.probabilities[i * self.state_labels.len() + s],
        }
    }

    pub(crate) fn row_parts(&self, i: usize) -> (f64, DielPhase, usize, f64) {
        (
            self.local_hour[i],
            self.diel[i],
            self.season[i] as usize,
            self.sun_elevation_deg[i],
        )
    }

    pub(crate) fn local_hour(&self) -> &[f64] {
        &self.local_hour
    }

    pub(crate) fn animal_of(&self, i: usize) -> usize {
        self.animal[i] as usize
    }
}

fn intervals(time_us: &[i64], animal_rows: &[Range<usize>]) -> Vec<f64> {
    let mut out = vec![0.0; time_us.len()];
    for r in animal_rows {
        let mut gaps: Vec<f64> = (r.start..r.end.saturating_sub(1))
            .map(|i| (time_us[i + 1] - time_us[i]) as f64 * 1e-6)
            .collect();
        out[r.start..r.end - 1].copy_from_slice(&gaps);
        let median = if gaps.is_empty() {
            0.0
        } else {
            gaps.sort_by(f64::total_cmp);
            let m = gaps.len() / 2;
            if gaps.len() % 2 == 1 {
                gaps[m]
            } else {
                0.5 * (gaps[m - 1] + gaps[m])
            }
        };
        out[r.end - 1] = median;
    }
    out
}

/// Median sampling interval (seconds) of the animal owning row range `r`.
pub(crate) fn median_interval(d: &Decoded, r: &Range<usize>) -> f64 {
    // The last row of every animal carries the median by construction.
    d.interval_s[r.end - 1]
}

/// Quantile of sorted data by linear interpolation between order statistics
/// (Hyndman & Fan 1996, definition 7).
pub(crate) fn quantile_sorted(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = (sorted.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Format a float for CSV: empty for NaN, shortest round-trip form otherwise.
pub(crate) fn csv_num(v: f64) -> String {
    if v.is_finite() {
        format!("{v}")
    } else {
        String::new()
    }
}

/// Quote a CSV field when needed (RFC 4180).
pub(crate) fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}
