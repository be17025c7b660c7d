//! `truth.json`: the model the demo tracks were simulated from, in the units a reader
//! compares estimates in, and an account of what was done to the tracks.
//!
//! Transition coefficients are per raw unit of each covariate (per unit of kelp
//! proportion, per metre of depth, per unit of the cos/sin hour terms). The fit stage
//! standardises numeric covariates before fitting, so an estimated slope per standard
//! deviation converts to these units as slope / sd (the sd is recorded with the fitted
//! model's covariate scaling).

use serde::{Deserialize, Serialize};

/// The true movement distributions of one state.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StateTruth {
    /// State label (the study's label).
    pub label: String,
    /// Mean of the gamma step-length distribution, metres per true step.
    pub step_mean_m: f64,
    /// Standard deviation of the gamma step-length distribution, metres.
    pub step_sd_m: f64,
    /// Mean of the von Mises turning-angle distribution, radians.
    pub angle_mean_rad: f64,
    /// Concentration κ of the von Mises turning-angle distribution.
    pub angle_concentration: f64,
}

/// One covariate of the true transition model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CovariateTruth {
    /// Name of the design column in the fitted models (e.g. `habitat_kelp`,
    /// `cos(2*pi*local_hour/24)`).
    pub name: String,
    /// Column of the step table it is computed from.
    pub column: String,
    /// Unit of the raw covariate.
    pub unit: String,
    /// How it is computed.
    pub definition: String,
}

/// One coefficient of a transition's linear predictor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Coefficient {
    /// The covariate it multiplies (a [`CovariateTruth::name`]).
    pub covariate: String,
    /// Value per raw unit of the covariate.
    pub value: f64,
    /// "per <unit of the covariate>".
    pub per: String,
}

/// The linear predictor of one off-diagonal transition, η = intercept + Σ βₖ xₖ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TransitionTruth {
    /// State label the transition leaves.
    pub from: String,
    /// State label the transition enters.
    pub to: String,
    /// Intercept of η.
    pub intercept: f64,
    /// Slopes, in the order of [`Truth::covariates`].
    pub coefficients: Vec<Coefficient>,
}

/// A fault written into `fixes.csv` on purpose.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlantedFault {
    /// Animal id (as written in the row).
    pub animal: String,
    /// "unparseable_time", "duplicate_time", "argos_class_z" or "spike".
    pub kind: String,
    /// The row's time text as written.
    pub time: String,
    /// What was done.
    pub detail: String,
}

/// One simulated animal.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AnimalTruth {
    /// Animal id.
    pub id: String,
    /// "Fastloc" or "Argos".
    pub tag: String,
    /// Deployment site name.
    pub site: String,
    /// First true position, UTC (ISO 8601).
    pub start_utc: String,
    /// Last true position, UTC (ISO 8601).
    pub end_utc: String,
    /// Number of true steps.
    pub steps: usize,
    /// True steps spent in each state, in state order.
    pub steps_per_state: Vec<usize>,
    /// Fix rows written to `fixes.csv` (including planted faults).
    pub fixes: usize,
    /// Headings redrawn because the step would have ended on land.
    pub heading_redraws: usize,
    /// Steps where no heading kept the animal in water, so it stayed put.
    pub stays: usize,
}

/// Everything known about how the demo data were made.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Always true: the data are invented.
    pub synthetic: bool,
    /// A sentence on the invented scenario.
    pub scenario: String,
    /// "full" or "small".
    pub size: String,
    /// Seed of every random draw.
    pub seed: u64,
    /// EPSG code of the rasters and of the simulation plane.
    pub crs_epsg: u32,
    /// Time zone of the local clock hour (also the study's `fixes.timezone`).
    pub timezone: String,
    /// True step interval, seconds.
    pub step_interval_s: f64,
    /// How the transitions are parameterised.
    pub transition_convention: String,
    /// The study candidate whose form is the true model.
    pub true_candidate: String,
    /// The states, in the study's order.
    pub states: Vec<StateTruth>,
    /// The transition covariates, in coefficient order.
    pub covariates: Vec<CovariateTruth>,
    /// The off-diagonal transitions (from-major, to ascending).
    pub transitions: Vec<TransitionTruth>,
    /// How the first state of each animal was drawn.
    pub initial_state: String,
    /// How animals were kept in water, and what that does to the angle distribution.
    pub land_rule: String,
    /// How the true track became fixes.
    pub observation_model: String,
    /// The simulated animals.
    pub animals: Vec<AnimalTruth>,
    /// Faults written on purpose.
    pub faults: Vec<PlantedFault>,
}
