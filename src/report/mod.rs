//! The report stage: summaries, figures and tables of the selected model, rendered with
//! tera templates into `report.html` (self-contained), `report.md`, `brief.md` and
//! `brief.html`, written atomically as one folder.
//!
//! [`run`] reads what `prepare` and `fit` wrote (it never needs them in memory, so
//! `cairn report` alone gives the same report as `cairn run`), builds the one
//! [`context::ReportContext`] every template reads, renders, and swaps the new report
//! folder in place of the old one only when everything has been written.

pub mod build;
pub mod context;
pub mod figures;
pub mod manifest;
pub mod recovery;
pub mod render;
pub mod text;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::modelling;
use crate::study::Study;

/// Why the report stage stopped.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// An earlier stage's outputs are missing or unreadable.
    #[error("{0}")]
    Inputs(String),
    /// A template could not be parsed or rendered.
    #[error(transparent)]
    Template(#[from] render::TemplateError),
    /// Writing failed.
    #[error("writing {path}: {reason}")]
    Write {
        /// The file or folder.
        path: PathBuf,
        /// Why.
        reason: String,
    },
}

/// What the report stage wrote.
#[derive(Debug, Clone)]
pub struct ReportOutput {
    /// The report folder.
    pub dir: PathBuf,
    /// Files written, relative to the output folder, with their SHA-256.
    pub files: BTreeMap<String, String>,
    /// Sections that could not be produced, with the reason.
    pub missing: Vec<(String, String)>,
}

fn werr(path: &Path) -> impl Fn(std::io::Error) -> ReportError + '_ {
    move |e| ReportError::Write {
        path: path.to_path_buf(),
        reason: e.to_string(),
    }
}

/// Runs the report stage for a study whose `prepare` and `fit` outputs exist.
///
/// # Errors
/// [`ReportError`] when an input is missing, a template fails or writing fails. The old
/// report folder is left untouched on any error.
pub fn run(study: &Study) -> Result<ReportOutput, ReportError> {
    let tera = render::load(study.report().templates.as_deref())?;
    let inputs = manifest::hash_inputs(study)
        .map_err(|(p, e)| ReportError::Inputs(format!("{}: {e}", p.display())))?;
    let stage = modelling::load(study).map_err(|e| ReportError::Inputs(e.to_string()))?;
    let built = build::build(study, &stage, &inputs).map_err(ReportError::Inputs)?;
    let mut docs = Vec::new();
    for name in ["report.html", "report.md", "brief.html", "brief.md"] {
        docs.push((name, render::render(&tera, name, &built.context)?));
    }

    let out = study.output();
    let final_dir = out.join("report");
    let tmp = out.join(".report-new");
    if tmp.exists() {
        std::fs::remove_dir_all(&tmp).map_err(werr(&tmp))?;
    }
    std::fs::create_dir_all(tmp.join("figures")).map_err(werr(&tmp))?;
    std::fs::create_dir_all(tmp.join("tables")).map_err(werr(&tmp))?;
    let mut files = BTreeMap::new();
    let mut put = |rel: String, bytes: &[u8]| -> Result<(), ReportError> {
        let p = tmp.join(&rel);
        std::fs::write(&p, bytes).map_err(werr(&p))?;
        files.insert(format!("report/{rel}"), manifest::sha256_bytes(bytes));
        Ok(())
    };
    for (name, text) in &docs {
        put(name.to_string(), text.as_bytes())?;
    }
    for (stem, fig) in &built.figures {
        put(format!("figures/{stem}.svg"), fig.svg().as_bytes())?;
        put(format!("figures/{stem}.png"), fig.png())?;
    }
    for (name, bytes) in &built.tables {
        put(format!("tables/{name}"), bytes)?;
    }
    // Swap: the old folder moves aside, the new one into place, the old one is removed.
    let old = out.join(".report-old");
    if old.exists() {
        std::fs::remove_dir_all(&old).map_err(werr(&old))?;
    }
    if final_dir.exists() {
        std::fs::rename(&final_dir, &old).map_err(werr(&final_dir))?;
    }
    std::fs::rename(&tmp, &final_dir).map_err(werr(&final_dir))?;
    if old.exists() {
        std::fs::remove_dir_all(&old).map_err(werr(&old))?;
    }
    Ok(ReportOutput {
        dir: final_dir,
        files,
        missing: built
            .context
            .missing
            .iter()
            .map(|m| (m.section.clone(), m.reason.clone()))
            .collect(),
    })
}
