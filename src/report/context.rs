//! The one context every report template reads (HTML report, Markdown report, brief).
//!
//! Numbers are formatted here, once, so that the HTML and Markdown reports say exactly
//! the same thing; templates only lay the strings out. Every user-supplied string (study
//! name, state labels, animal ids, column names) arrives as plain text and is escaped by
//! the HTML templates' auto-escaping; only the figures' SVG (drawn by us, with its text
//! escaped by the SVG writer) is inserted unescaped.

use serde::Serialize;

/// Everything a report shows.
#[derive(Debug, Clone, Serialize)]
pub struct ReportContext {
    /// Study name, file and settings in brief.
    pub study: StudyInfo,
    /// Data and cleaning.
    pub data: DataSection,
    /// Model comparison.
    pub models: ModelSection,
    /// The chosen model.
    pub chosen: ChosenSection,
    /// What drives the states.
    pub drivers: DriversSection,
    /// Activity budgets.
    pub budgets: Section<BudgetSection>,
    /// Hotspots of state-days.
    pub hotspots: Section<HotspotSection>,
    /// Per-animal table.
    pub animals: AnimalSection,
    /// Pseudo-residual diagnostics.
    pub diagnostics: Section<DiagnosticsSection>,
    /// Recovery of known parameters (simulated studies with a truth file).
    pub recovery: Option<RecoverySection>,
    /// Methods paragraph, written for the model actually fitted.
    pub methods: Vec<String>,
    /// Published references the methods rely on.
    pub references: Vec<String>,
    /// Cautions every report and brief carries.
    pub cautions: Vec<String>,
    /// Findings for the manager brief, each with its uncertainty.
    pub findings: Vec<String>,
    /// What the results can and cannot support (brief).
    pub supports: Vec<String>,
    /// Sections that could not be produced, and why.
    pub missing: Vec<Missing>,
    /// Software, seed, inputs.
    pub reproducibility: Reproducibility,
}

/// A section that may be absent, with the reason.
#[derive(Debug, Clone, Serialize)]
pub struct Section<T> {
    /// The content, when it could be produced.
    pub content: Option<T>,
    /// Why not, otherwise.
    pub reason: Option<String>,
}

impl<T> Section<T> {
    pub(crate) fn from_result(r: Result<T, String>) -> Self {
        match r {
            Ok(c) => Section {
                content: Some(c),
                reason: None,
            },
            Err(e) => Section {
                content: None,
                reason: Some(e),
            },
        }
    }
}

/// A section that could not be produced.
#[derive(Debug, Clone, Serialize)]
pub struct Missing {
    /// Section title.
    pub section: String,
    /// Why.
    pub reason: String,
}

/// A figure: inline SVG for the HTML report, file names for the Markdown report.
#[derive(Debug, Clone, Serialize)]
pub struct FigureRef {
    /// File stem under `figures/`.
    pub stem: String,
    /// SVG text (for inline use).
    pub svg: String,
    /// Caption.
    pub caption: String,
}

/// A table of preformatted cells.
#[derive(Debug, Clone, Serialize, Default)]
pub struct Table {
    /// Column headers.
    pub header: Vec<String>,
    /// Rows of cells.
    pub rows: Vec<Vec<String>>,
}

/// Study header.
#[derive(Debug, Clone, Serialize)]
pub struct StudyInfo {
    /// Study name.
    pub name: String,
    /// Study file name (not the full path, so reports do not leak folder names).
    pub file: String,
    /// Time zone of naive timestamps.
    pub timezone: String,
    /// cairn version.
    pub version: String,
    /// One-paragraph overview.
    pub overview: String,
}

/// Data and cleaning.
#[derive(Debug, Clone, Serialize)]
pub struct DataSection {
    /// Input files with row counts.
    pub files: Table,
    /// Rows read, fixes kept, excluded, steps, animals (formatted).
    pub counts: Table,
    /// Exclusions by reason with their meaning.
    pub exclusions: Table,
    /// Outlier filter used.
    pub speed_filter: String,
    /// Regular grid (smoother) in brief, if used.
    pub grid: Option<String>,
    /// Animals skipped, with the reason.
    pub skipped: Vec<String>,
}

/// Model comparison.
#[derive(Debug, Clone, Serialize)]
pub struct ModelSection {
    /// Selection rule in words.
    pub rule: String,
    /// Selected candidate.
    pub selected: String,
    /// Comparison table.
    pub table: Table,
    /// Candidates that could not be fitted.
    pub failed: Vec<String>,
    /// Steps left out of every candidate (a covariate was missing), in words.
    pub left_out: Option<String>,
    /// ΔAIC figure.
    pub figure: Option<FigureRef>,
}

/// The chosen model.
#[derive(Debug, Clone, Serialize)]
pub struct ChosenSection {
    /// Candidate name.
    pub name: String,
    /// Number of states.
    pub n_states: usize,
    /// State labels with their colours.
    pub states: Vec<StateSwatch>,
    /// State-dependent distributions (per state, with intervals).
    pub distributions: Table,
    /// Every natural-scale parameter with SE and interval.
    pub parameters: Table,
    /// Convergence in words.
    pub convergence: String,
    /// Covariance problem, if any.
    pub covariance_problem: Option<String>,
    /// Histograms with fitted densities.
    pub figure: Option<FigureRef>,
}

/// A state label and its colour.
#[derive(Debug, Clone, Serialize)]
pub struct StateSwatch {
    /// Label.
    pub label: String,
    /// Hex colour (Okabe–Ito).
    pub colour: String,
}

/// What drives the states.
#[derive(Debug, Clone, Serialize)]
pub struct DriversSection {
    /// Association table (compact).
    pub association: Option<Table>,
    /// Plain readings of the associations whose interval excludes 1.
    pub readings: Vec<String>,
    /// Occupancy-curve figures, one per numeric or cyclic covariate.
    pub occupancy: Vec<FigureRef>,
    /// Transition-curve figures.
    pub transitions: Vec<FigureRef>,
    /// Occupancy by level of categorical covariates.
    pub levels: Option<Table>,
    /// Where the other covariates are held.
    pub reference: String,
    /// Why there is nothing to show, when the chosen model has no covariates.
    pub reason: Option<String>,
}

/// Activity budgets.
#[derive(Debug, Clone, Serialize)]
pub struct BudgetSection {
    /// How time in a state is counted, in words.
    pub method: String,
    /// Hourly stacked shares with the night mask.
    pub hourly: FigureRef,
    /// Diel phase and season.
    pub grouped: FigureRef,
    /// Diel-phase table.
    pub diel: Table,
    /// Season table.
    pub season: Table,
}

/// Hotspots.
#[derive(Debug, Clone, Serialize)]
pub struct HotspotSection {
    /// State counted.
    pub state: String,
    /// Rule in words.
    pub rule: String,
    /// Map.
    pub figure: Option<FigureRef>,
    /// Brief's coarser map.
    pub brief_figure: Option<FigureRef>,
    /// Why the map is empty, if it is.
    pub note: Option<String>,
    /// Top cells.
    pub top: Table,
    /// Cells shown and suppressed (report grid).
    pub shown: usize,
    /// Cells suppressed.
    pub suppressed: usize,
    /// Brief grid cell size and counts, in words.
    pub brief_rule: String,
}

/// Per-animal table.
#[derive(Debug, Clone, Serialize)]
pub struct AnimalSection {
    /// How shares are counted.
    pub method: String,
    /// Table.
    pub table: Table,
}

/// Diagnostics.
#[derive(Debug, Clone, Serialize)]
pub struct DiagnosticsSection {
    /// QQ and ACF figure.
    pub figure: FigureRef,
    /// Notes in words (e.g. residual autocorrelation).
    pub notes: Vec<String>,
}

/// Recovery of known parameters.
#[derive(Debug, Clone, Serialize)]
pub struct RecoverySection {
    /// What was compared.
    pub note: String,
    /// Truth vs estimate.
    pub table: Table,
}

/// Reproducibility.
#[derive(Debug, Clone, Serialize)]
pub struct Reproducibility {
    /// cairn version.
    pub version: String,
    /// Seed of the random starts.
    pub seed: String,
    /// Input files with SHA-256.
    pub inputs: Table,
}
