//! Command-line front end: clap definitions and dispatch only.
//!
//! Exit codes (also in `--help`): 0 finished cleanly; 1 finished, but rows or animals
//! were excluded or skipped (see the exclusions log); 2 unusable input or usage.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, bail};
use clap::{Parser, Subcommand};

use crate::prepare::{self, Summary};
use crate::study::{Study, TEMPLATE};

const AFTER_HELP: &str = "\
Exit codes: 0 finished cleanly; 1 finished, but some rows or animals were excluded or
skipped (listed in exclusions.csv and the summary); 2 unusable input or usage error.";

/// cairn: telemetry fixes → cleaned tracks → behavioural-state models → reports.
#[derive(Debug, Parser)]
#[command(name = "cairn", version, about, after_help = AFTER_HELP)]
pub struct Cli {
    /// Print only errors.
    #[arg(short, long, global = true)]
    pub quiet: bool,
    /// Print each stage's full account (cleaning summary, model table).
    #[arg(short, long, global = true, conflicts_with = "quiet")]
    pub verbose: bool,
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Write a commented study-file template (study.toml) into DIR.
    Init {
        /// Folder to write into (created if needed); an existing study.toml is kept.
        dir: PathBuf,
    },
    /// Validate a study and report, per animal, fixes read, kept and excluded by reason.
    ///
    /// Writes nothing. Exit 0 when every row is usable, 1 when some were excluded.
    Check {
        /// The study file (study.toml).
        study: PathBuf,
    },
    /// Ingest and clean fixes, smooth tracks onto a regular grid (with `[grid]`), measure
    /// steps and annotate covariates; write the cleaned fixes, the smoothed track, the step
    /// table with covariates, the column dictionary, the exclusions and missing-covariate
    /// logs and a JSON summary into the study's output folder.
    Prepare {
        /// The study file (study.toml).
        study: PathBuf,
        /// Also write the tables as CSV (as `output.csv = true` in the study).
        #[arg(long)]
        csv: bool,
    },
    /// Fit the study's candidate hidden Markov models to the prepared step table, compare
    /// them (AIC, BIC), select one by the study's rule and decode it.
    ///
    /// Reads steps.parquet (run `prepare` first); writes models/<name>.json,
    /// model_comparison.csv, decoded.parquet and fit_summary.json. Exit 1 when a candidate
    /// failed, did not converge, or has no usable covariance.
    Fit {
        /// The study file (study.toml).
        study: PathBuf,
    },
    /// Run the whole study: prepare, fit, report. A stage whose inputs are unchanged since
    /// the last run (same files, same settings, same cairn version) reuses its outputs.
    ///
    /// Writes everything `prepare` and `fit` write, the report folder (report.html,
    /// report.md, brief.html, brief.md, figures/, tables/) and manifest.json, and prints a
    /// stage-timing table. Exit 1 when rows or animals were excluded or a fit is not clean.
    Run {
        /// The study file (study.toml).
        study: PathBuf,
        /// Rerun every stage even when its inputs are unchanged.
        #[arg(long)]
        force: bool,
    },
    /// Render the report from the outputs of `prepare` and `fit`: summaries, figures
    /// (SVG + PNG), tables (CSV, GeoJSON) and report.html, report.md, brief.html, brief.md
    /// in <output>/report, replaced as a whole only when everything was written.
    Report {
        /// The study file (study.toml).
        study: PathBuf,
    },
    /// Write the invented demo study (a synthetic fjord, its habitat and depth rasters and
    /// a dozen simulated diving predators with Argos and Fastloc-GPS tags) into DIR and run
    /// it end to end, as `run` does. The report compares the fit with the true model.
    Demo {
        /// Folder to write the demo study into (default: cairn-demo).
        #[arg(default_value = "cairn-demo")]
        dir: PathBuf,
        /// A small version (4 animals, 8 days each) that runs in seconds.
        #[arg(long)]
        small: bool,
        /// Seed of the simulation.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Rerun every stage even when its inputs are unchanged.
        #[arg(long)]
        force: bool,
    },
    /// Simulate steps, turning angles and true states from a fitted model at the observed
    /// covariates and series lengths; writes simulated_<name>.csv.
    Simulate {
        /// The study file (study.toml).
        study: PathBuf,
        /// Candidate model to simulate from (default: the one `fit` selected).
        #[arg(long)]
        model: Option<String>,
        /// Seed of the simulation.
        #[arg(long, default_value_t = 1)]
        seed: u64,
    },
}

/// How a command finished.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything was usable.
    Clean,
    /// Finished, but something was excluded or skipped.
    WithExclusions,
}

impl Outcome {
    /// The documented exit code.
    pub fn exit_code(self) -> i32 {
        match self {
            Outcome::Clean => 0,
            Outcome::WithExclusions => 1,
        }
    }
}

/// Runs a parsed command line.
///
/// # Errors
/// Any failure, with context naming the file; the binary prints it and exits with 2.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Init { dir } => init(&dir, cli.quiet),
        Command::Check { study } => {
            let study = load(&study)?;
            let p = prepare::run(&study)?;
            if !cli.quiet {
                print!("{}", render_check(&study, &p.summary));
            }
            Ok(outcome(&p.summary))
        }
        Command::Prepare { study, csv } => {
            let study = load(&study)?;
            let p = prepare::run(&study)?;
            let written = prepare::write(&study, &p, csv || study.write_csv())?;
            if !cli.quiet {
                print!("{}", render_check(&study, &p.summary));
                println!("\nwritten:");
                for f in &written.files {
                    println!("  {f}");
                }
            }
            Ok(outcome(&p.summary))
        }
        Command::Fit { study } => fit_command(&study, cli.quiet),
        Command::Run { study, force } => {
            let study = load(&study)?;
            run_command(&study, force, cli.quiet, cli.verbose)
        }
        Command::Demo {
            dir,
            small,
            seed,
            force,
        } => {
            let files = crate::demo::write(
                &dir,
                &crate::demo::DemoOptions {
                    size: if small {
                        crate::demo::DemoSize::Small
                    } else {
                        crate::demo::DemoSize::Full
                    },
                    seed,
                },
            )?;
            if !cli.quiet {
                println!("demo study written: {}", files.study.display());
            }
            let study = load(&files.study)?;
            run_command(&study, force, cli.quiet, cli.verbose)
        }
        Command::Report { study } => {
            let study = load(&study)?;
            let out = crate::report::run(&study)?;
            if !cli.quiet {
                print!("{}", render_report(&out));
            }
            Ok(if out.missing.is_empty() {
                Outcome::Clean
            } else {
                Outcome::WithExclusions
            })
        }
        Command::Simulate { study, model, seed } => {
            let study = load(&study)?;
            let out = crate::modelling::simulate(&study, model.as_deref(), seed)?;
            if !cli.quiet {
                println!("written: {}", out.display());
            }
            Ok(Outcome::Clean)
        }
    }
}

/// Runs the pipeline with a spinner on the terminal (hidden when stderr is not one).
pub fn run_command(study: &Study, force: bool, quiet: bool, verbose: bool) -> Result<Outcome> {
    let bar = if quiet {
        indicatif::ProgressBar::hidden()
    } else {
        let b = indicatif::ProgressBar::new_spinner();
        b.enable_steady_tick(std::time::Duration::from_millis(120));
        b
    };
    let mut progress = |line: &str| {
        bar.set_message(line.to_string());
        if verbose {
            bar.suspend(|| eprintln!("{line}"));
        }
    };
    let animals = |done: usize, total: usize| {
        bar.set_message(format!(
            "prepare: smoothing tracks, {done} of {total} animals"
        ));
    };
    let r = crate::pipeline::run(
        study,
        crate::pipeline::RunOptions { force },
        &mut progress,
        &animals,
    );
    bar.finish_and_clear();
    let r = r?;
    if !quiet {
        if verbose {
            print!("{}", render_report(&r.report));
        }
        println!("{:<10} {:>8}", "stage", "seconds");
        for s in &r.stages {
            println!(
                "{:<10} {:>8.1}  {}",
                s.name,
                s.seconds,
                if s.reused {
                    "reused (inputs unchanged)"
                } else {
                    "ran"
                }
            );
        }
        for (section, why) in &r.report.missing {
            println!("not produced: {section}: {why}");
        }
        println!("report: {}", r.report.dir.join("report.html").display());
        println!("manifest: {}", r.manifest.display());
    }
    Ok(
        if r.exclusions || !r.fits_clean || !r.report.missing.is_empty() {
            Outcome::WithExclusions
        } else {
            Outcome::Clean
        },
    )
}

/// What `report` prints: the files written and the sections left out.
pub fn render_report(out: &crate::report::ReportOutput) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "report folder: {}", out.dir.display());
    for f in out.files.keys() {
        let _ = writeln!(o, "  {f}");
    }
    for (section, why) in &out.missing {
        let _ = writeln!(o, "not produced: {section}: {why}");
    }
    o
}

fn fit_command(study: &Path, quiet: bool) -> Result<Outcome> {
    let study = load(study)?;
    let mut progress = |line: &str| {
        if !quiet {
            eprintln!("{line}");
        }
    };
    let stage = crate::modelling::run(&study, &mut progress)?;
    let written = crate::modelling::write(&study, &stage)?;
    if !quiet {
        println!("{}", render_fit(&stage));
        println!("written:");
        for f in &written {
            println!("  {}", f.display());
        }
    }
    Ok(if stage.all_clean() {
        Outcome::Clean
    } else {
        Outcome::WithExclusions
    })
}

/// The model comparison that `fit` prints.
pub fn render_fit(stage: &crate::modelling::FitStage) -> String {
    let mut o = String::new();
    let _ = writeln!(
        o,
        "{:<24} {:>6} {:>6} {:>12} {:>12} {:>8} {:>10}  notes",
        "model", "states", "params", "log L", "AIC", "ΔAIC", "best/starts"
    );
    for r in &stage.comparison {
        let f = stage.fits.iter().find(|f| f.candidate.name == r.name);
        let m = f.and_then(|f| f.result.as_ref().ok());
        let mut notes = Vec::new();
        if !r.converged {
            notes.push("NOT CONVERGED".to_string());
        }
        if let Some(p) = m.and_then(|m| m.covariance().problem()) {
            notes.push(format!("covariance: {p}"));
        }
        let _ = writeln!(
            o,
            "{:<24} {:>6} {:>6} {:>12.2} {:>12.2} {:>8.2} {:>10}  {}",
            r.name,
            r.n_states,
            r.n_params,
            r.loglik,
            r.aic,
            r.delta_aic,
            m.map(|m| format!("{}/{}", m.convergence().n_at_best, m.convergence().n_starts))
                .unwrap_or_default(),
            notes.join("; ")
        );
    }
    for f in &stage.fits {
        if let Err(e) = &f.result {
            let _ = writeln!(o, "{:<24} could not be fitted: {e}", f.candidate.name);
        }
    }
    let _ = writeln!(o, "selected: {}", stage.fits[stage.selected].candidate.name);
    if let Some(note) = &stage.curves_note {
        let _ = writeln!(o, "{note}");
    }
    o
}

fn load(path: &Path) -> Result<Study> {
    Ok(Study::load(path)?)
}

fn outcome(s: &Summary) -> Outcome {
    if s.excluded() > 0 || !s.skipped().is_empty() {
        Outcome::WithExclusions
    } else {
        Outcome::Clean
    }
}

fn init(dir: &Path, quiet: bool) -> Result<Outcome> {
    std::fs::create_dir_all(dir)
        .with_context(|| format!("cannot create folder {}", dir.display()))?;
    let path = dir.join("study.toml");
    if path.exists() {
        bail!("{} already exists; not overwriting it", path.display());
    }
    crate::io::write_atomic(&path, |w| {
        use std::io::Write;
        w.write_all(TEMPLATE.as_bytes()).map_err(|e| e.to_string())
    })?;
    if !quiet {
        println!(
            "wrote {}; edit it, then run `cairn check {}`",
            path.display(),
            path.display()
        );
    }
    Ok(Outcome::Clean)
}

fn fmt_duration(s: f64) -> String {
    if s < 120.0 {
        format!("{s:.0} s")
    } else if s < 7200.0 {
        format!("{:.1} min", s / 60.0)
    } else if s < 2.0 * 86_400.0 {
        format!("{:.1} h", s / 3600.0)
    } else {
        format!("{:.1} d", s / 86_400.0)
    }
}

/// The per-animal table that `check` and `prepare` print.
pub fn render_check(study: &Study, s: &Summary) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "study: {}  ({})", s.study, study.source().display());
    let _ = writeln!(
        o,
        "rows read: {}   fixes kept: {}   excluded: {}   steps: {}",
        s.rows_read,
        s.fixes_kept,
        s.excluded(),
        s.steps
    );
    let _ = writeln!(
        o,
        "speed filter: {}   gap: {}",
        s.speed_filter,
        fmt_duration(s.gap_s)
    );
    let _ = writeln!(
        o,
        "\n{:<14} {:>7} {:>7} {:>8}  {:<20} {:>8} {:>9} {:>5}  classes kept",
        "animal", "read", "kept", "excluded", "first fix (UTC)", "span", "median dt", "segs"
    );
    for a in &s.animals {
        let excluded: usize = a.excluded.values().sum();
        let classes: Vec<String> = a.classes.iter().map(|(c, n)| format!("{c}:{n}")).collect();
        let _ = writeln!(
            o,
            "{:<14} {:>7} {:>7} {:>8}  {:<20} {:>8} {:>9} {:>5}  {}",
            a.animal,
            a.rows_read,
            a.fixes_kept,
            excluded,
            a.first_utc.as_deref().unwrap_or("-"),
            format!("{:.1} d", a.span_days),
            a.median_interval_s
                .map(fmt_duration)
                .unwrap_or_else(|| "-".into()),
            a.segments,
            classes.join(" ")
        );
        if !a.excluded.is_empty() {
            let reasons: Vec<String> = a.excluded.iter().map(|(r, n)| format!("{r} {n}")).collect();
            let _ = writeln!(o, "{:<14} excluded: {}", "", reasons.join(", "));
        }
        if a.fixes_kept == 0 {
            let _ = writeln!(o, "{:<14} skipped: no usable fixes", "");
        }
    }
    if let Some(records) = &s.smoother {
        let _ = writeln!(o, "\nsmoothed onto a regular grid (state-space model):");
        for r in records {
            match &r.reason {
                Some(why) => {
                    let _ = writeln!(o, "  {:<14} skipped: {why}", r.animal);
                }
                None => {
                    let _ = writeln!(
                        o,
                        "  {:<14} {} grid points ({} with large error), β = {:.3e}/s, σ = {:.3e}, log L = {:.1}{}",
                        r.animal,
                        r.grid_points,
                        r.large_se_points,
                        r.beta.unwrap_or(f64::NAN),
                        r.sigma.unwrap_or(f64::NAN),
                        r.log_likelihood.unwrap_or(f64::NAN),
                        if r.converged == Some(true) {
                            ""
                        } else {
                            "  NOT CONVERGED"
                        }
                    );
                }
            }
        }
    }
    if !s.excluded_by_reason.is_empty() {
        let _ = writeln!(o, "\nexcluded rows by reason:");
        for (r, n) in &s.excluded_by_reason {
            let _ = writeln!(o, "  {r:<24} {n}");
        }
    }
    render_covariates(&mut o, &s.covariates);
    o
}

fn render_covariates(o: &mut String, c: &crate::covariates::CovariateSummary) {
    let hour = match c.hour {
        crate::covariates::HourKind::Clock => "clock",
        crate::covariates::HourKind::Solar => "solar",
    };
    let _ = writeln!(
        o,
        "\ncovariates: {} columns   hour: {hour}   seasons: {}   missing cells: {}",
        c.columns.len(),
        c.seasons,
        c.missing_total()
    );
    for (col, reasons) in &c.missing {
        let r: Vec<String> = reasons.iter().map(|(k, n)| format!("{k} {n}")).collect();
        let _ = writeln!(o, "  missing {col:<24} {}", r.join(", "));
    }
    for (layer, codes) in &c.unknown_class_codes {
        let r: Vec<String> = codes
            .iter()
            .map(|(k, n)| format!("{k} ({n} cells)"))
            .collect();
        let _ = writeln!(
            o,
            "  layer {layer}: class codes in no group: {}",
            r.join(", ")
        );
    }
    if !c.animals_without_attributes.is_empty() {
        let _ = writeln!(
            o,
            "  animals missing from the attribute table: {}",
            c.animals_without_attributes.join(", ")
        );
    }
    if !c.attribute_ids_without_steps.is_empty() {
        let _ = writeln!(
            o,
            "  attribute-table ids without steps: {}",
            c.attribute_ids_without_steps.join(", ")
        );
    }
    for s in &c.standardisation {
        let _ = writeln!(
            o,
            "  standardised {:<19} mean {:.6}  sd {:.6}  (n = {})",
            s.column, s.mean, s.sd, s.n
        );
    }
}
