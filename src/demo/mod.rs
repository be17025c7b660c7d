//! The invented demo study: a fictional high-latitude fjord, its seabed and bathymetry
//! rasters, and tracked diving predators whose behaviour follows a known
//! covariate-driven hidden Markov model, degraded by realistic tags and a few planted
//! faults. Nothing here is real data.
//!
//! Scenario: Skelvanger Fjord (invented, about 70.1° N 19.4° E, so the tracks see polar
//! night in midwinter and midnight sun in midsummer), 30 km × 20 km of winding main
//! channel with two side arms and a scatter of islands and skerries; tangle-divers (an
//! invented coastal diving predator that forages along kelp margins) tagged from five
//! deployment sites, at dates spread over the year.
//!
//! How it is made ([`generate`]): the landscape ([`landscape`]) is drawn on a 25 m grid
//! and written as `habitat.tif` (seabed classes) and a 100 m `depth.tif`; each animal's
//! true track is simulated hourly ([`movement`]) with three states whose switches depend
//! on the kelp proportion and water depth at the animal's true position and on the local
//! clock hour, computed from those same rasters with cairn's own class-proportion and
//! bilinear code; tags then observe the track irregularly with Fastloc-GPS or Argos
//! errors ([`observe`]). [`write`] puts the study file, the data and `truth.json` (the
//! true model in raw covariate units) in a folder, each file atomically. Every draw comes
//! from ChaCha8 streams of the seed, so a seed gives byte-identical files.

pub mod landscape;
pub mod movement;
pub mod observe;
pub mod truth;

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};

use chrono::{NaiveDate, TimeZone, Utc};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::geo::focal::FocalError;
use crate::geo::raster::RasterData;
use crate::geo::raster_write::{Compression, GeoTiffLayout, write_f32, write_u8};
use crate::hmm::HmmError;
use crate::hmm::design::RawColumn;
use crate::io::{WriteError, write_atomic};

use landscape::Landscape;
use movement::{Env, TrueTrack};
use observe::{FaultPlan, FixRow, Tag};
pub use truth::Truth;
use truth::{AnimalTruth, Coefficient, CovariateTruth, StateTruth, TransitionTruth};

/// Invented name of the fjord.
pub const FJORD: &str = "Skelvanger Fjord";
/// Invented common name of the tracked species.
pub const SPECIES: &str = "tangle-diver";
/// Time zone of the local clock hour and of the study file.
pub const TIMEZONE: &str = "Europe/Oslo";
/// Name of the candidate model whose form is the true model.
pub const TRUE_CANDIDATE: &str = "habitat, depth and time of day";

/// Deployment sites: name and position in local metres (east, north of the rasters'
/// south-west corner). An animal starts at the nearest point in water.
const SITES: [(&str, f64, f64); 5] = [
    ("North Arm kelp bay", 12_700.0, 13_000.0),
    ("Skerry Reach", 8_300.0, 9_500.0),
    ("Outer Sound", 3_000.0, 10_300.0),
    ("Head Basin", 22_000.0, 11_400.0),
    ("South Arm", 21_300.0, 7_000.0),
];

/// How much data to make.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DemoSize {
    /// 12 animals, 25–40 days each at dates across the year (about 10 000 true steps).
    Full,
    /// 4 animals × 8 days in four seasons, for quick end-to-end tests.
    Small,
}

impl DemoSize {
    /// "full" or "small".
    pub fn label(self) -> &'static str {
        match self {
            DemoSize::Full => "full",
            DemoSize::Small => "small",
        }
    }
}

/// What to generate.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DemoOptions {
    /// Amount of data.
    pub size: DemoSize,
    /// Seed of every random draw (landscape texture, tracks, tags, faults).
    pub seed: u64,
}

/// Why the demo could not be made.
#[derive(Debug, thiserror::Error)]
pub enum DemoError {
    /// A file could not be written.
    #[error(transparent)]
    Write(#[from] WriteError),
    /// The true model's constants were rejected by the engine.
    #[error("demo true model: {0}")]
    Model(#[from] HmmError),
    /// The kelp-proportion calculator could not be built.
    #[error("demo habitat layer: {0}")]
    Habitat(#[from] FocalError),
    /// A true model term does not parse (a defect of the demo's constants).
    #[error("demo true model term: {0}")]
    Term(String),
    /// No water near a deployment site.
    #[error("demo deployment site `{0}` has no water within 5 km")]
    Site(String),
    /// `truth.json` could not be read.
    #[error("cannot read {path}: {reason}")]
    Read {
        /// The file.
        path: PathBuf,
        /// What went wrong.
        reason: String,
    },
}

/// The paths of the files [`write`] made.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DemoFiles {
    /// The folder.
    pub dir: PathBuf,
    /// `study.toml`.
    pub study: PathBuf,
    /// `fixes.csv`: the tag data, planted faults included.
    pub fixes: PathBuf,
    /// `animals.csv`: sex, age class, tag type and deployment site per animal.
    pub animals: PathBuf,
    /// `habitat.tif`: seabed classes.
    pub habitat: PathBuf,
    /// `depth.tif`: water depth.
    pub depth: PathBuf,
    /// `truth.json`: the true model and what was done.
    pub truth: PathBuf,
    /// `true_track.csv`: the hourly true positions, states and covariates.
    pub true_track: PathBuf,
    /// `README.md`: the scenario in a few paragraphs.
    pub readme: PathBuf,
}

impl DemoFiles {
    fn in_dir(dir: &Path) -> DemoFiles {
        DemoFiles {
            dir: dir.to_path_buf(),
            study: dir.join("study.toml"),
            fixes: dir.join("fixes.csv"),
            animals: dir.join("animals.csv"),
            habitat: dir.join("habitat.tif"),
            depth: dir.join("depth.tif"),
            truth: dir.join("truth.json"),
            true_track: dir.join("true_track.csv"),
            readme: dir.join("README.md"),
        }
    }

    /// Every file, in the order above.
    pub fn all(&self) -> [&Path; 8] {
        [
            &self.study,
            &self.fixes,
            &self.animals,
            &self.habitat,
            &self.depth,
            &self.truth,
            &self.true_track,
            &self.readme,
        ]
    }
}

/// One simulated animal.
#[derive(Debug, Clone)]
pub struct DemoAnimal {
    /// Animal id.
    pub id: String,
    /// Tag type.
    pub tag: Tag,
    /// Deployment site.
    pub site: String,
    /// "F" or "M".
    pub sex: String,
    /// "adult" or "juvenile".
    pub age_class: String,
    /// The true hourly track.
    pub track: TrueTrack,
}

/// A generated demo, in memory.
pub struct Demo {
    /// The landscape (the rasters as written).
    pub landscape: Landscape,
    /// The animals with their true tracks.
    pub animals: Vec<DemoAnimal>,
    /// Every row of `fixes.csv`, in file order.
    pub fixes: Vec<FixRow>,
    /// The truth written as `truth.json`.
    pub truth: Truth,
}

/// One animal's plan: tag, site, start date, days, attributes, faults.
struct Plan {
    tag: Tag,
    site: usize,
    start: (i32, u32, u32),
    days: u32,
    faults: FaultPlan,
}

fn plans(o: &DemoOptions, rng: &mut ChaCha8Rng) -> Vec<Plan> {
    use Tag::{Argos, Fastloc};
    // Midwinter dates fall in the polar night at 70° N, midsummer ones in the midnight
    // sun, March and September ones near the equinoxes.
    let table: &[(Tag, (i32, u32, u32))] = match o.size {
        DemoSize::Full => &[
            (Fastloc, (2024, 12, 2)),
            (Argos, (2024, 12, 12)),
            (Fastloc, (2025, 1, 3)),
            (Fastloc, (2025, 3, 5)),
            (Argos, (2025, 3, 14)),
            (Fastloc, (2025, 4, 18)),
            (Fastloc, (2025, 5, 28)),
            (Argos, (2025, 6, 8)),
            (Fastloc, (2025, 6, 20)),
            (Fastloc, (2025, 8, 12)),
            (Argos, (2025, 9, 10)),
            (Fastloc, (2025, 10, 6)),
        ],
        DemoSize::Small => &[
            (Fastloc, (2024, 12, 10)),
            (Argos, (2025, 3, 16)),
            (Fastloc, (2025, 6, 16)),
            (Fastloc, (2025, 9, 18)),
        ],
    };
    table
        .iter()
        .enumerate()
        .map(|(i, &(tag, start))| Plan {
            tag,
            site: i % SITES.len(),
            start,
            days: match o.size {
                DemoSize::Full => rng.random_range(25..=40),
                DemoSize::Small => 8,
            },
            faults: FaultPlan {
                unparseable: i == 0,
                duplicate: i % 2 == 1,
                spike: i % 3 == 2 || i == 3,
            },
        })
        .collect()
}

/// The design column names of the true model's terms, exactly as the fit stage names them.
fn covariate_names() -> Result<Vec<String>, DemoError> {
    let terms = movement::TRUE_TERMS
        .iter()
        .map(|t| crate::study::model::parse_term("demo", t))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| DemoError::Term(e.to_string()))?;
    let mut cols = BTreeMap::new();
    for t in &terms {
        for c in t.columns() {
            cols.insert(c.to_string(), RawColumn::Numeric(vec![0.0, 1.0]));
        }
    }
    let m = crate::modelling::design_of(&terms).build(&cols)?;
    Ok(m.names().to_vec())
}

/// The nearest point in water to a site, searched on rings 50 m apart.
fn start_point(env: &Env<'_>, site: usize) -> Result<(f64, f64), DemoError> {
    let (name, e, n) = SITES[site];
    let (x, y) = Landscape::to_xy(e, n);
    for ring in 0..100 {
        let r = 50.0 * f64::from(ring);
        let k = (ring * 8).max(1);
        for j in 0..k {
            let a = std::f64::consts::TAU * f64::from(j) / f64::from(k);
            let (px, py) = (x + r * a.cos(), y + r * a.sin());
            if env.open_water(px, py) {
                return Ok((px, py));
            }
        }
    }
    Err(DemoError::Site(name.to_string()))
}

fn start_us((y, m, d): (i32, u32, u32)) -> i64 {
    let date = NaiveDate::from_ymd_opt(y, m, d).expect("plan dates are valid");
    Utc.from_utc_datetime(&date.and_hms_opt(0, 0, 0).expect("midnight exists"))
        .timestamp_micros()
}

/// Seeded ChaCha8 stream `k` of the demo seed.
fn stream(seed: u64, k: u64) -> ChaCha8Rng {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    r.set_stream(k);
    r
}

/// Generates the demo in memory.
///
/// # Errors
/// [`DemoError`] only when the demo's own constants are inconsistent (a true model the
/// engine rejects, a site without water).
///
/// # Examples
/// ```
/// use cairn::demo::{DemoOptions, DemoSize, generate};
/// let d = generate(&DemoOptions { size: DemoSize::Small, seed: 7 })?;
/// assert_eq!(d.animals.len(), 4);
/// assert!(d.truth.synthetic);
/// # Ok::<(), cairn::demo::DemoError>(())
/// ```
pub fn generate(o: &DemoOptions) -> Result<Demo, DemoError> {
    let landscape = Landscape::build(o.seed);
    let names = covariate_names()?;
    let model = movement::true_model(&names)?;
    let env = Env {
        landscape: &landscape,
        kelp: landscape.kelp()?,
        tz: TIMEZONE.parse().expect("a valid IANA zone"),
    };
    let plans = plans(o, &mut stream(o.seed, 0));
    let mut animals = Vec::new();
    let mut fixes = Vec::new();
    let mut faults = Vec::new();
    let mut animal_truth = Vec::new();
    for (i, p) in plans.iter().enumerate() {
        let id = format!("td{:02}", i + 1);
        let mut rng = stream(o.seed, 1 + 2 * i as u64);
        let start = start_point(&env, p.site)?;
        let steps = p.days as usize * 24;
        let track =
            movement::simulate_track(&model, &env, start, start_us(p.start), steps, &mut rng)?;
        let mut obs_rng = stream(o.seed, 2 + 2 * i as u64);
        let mut rows = observe::observe(&id, p.tag, &track, &landscape.utm, &mut obs_rng);
        faults.extend(observe::plant_faults(
            &mut rows,
            p.faults,
            &landscape.utm,
            &mut obs_rng,
        ));
        let mut per_state = vec![0; movement::STATES.len()];
        for pt in &track.points[..track.points.len() - 1] {
            per_state[pt.state] += 1;
        }
        animal_truth.push(AnimalTruth {
            id: id.clone(),
            tag: p.tag.label().to_string(),
            site: SITES[p.site].0.to_string(),
            start_utc: observe::iso_utc(track.points[0].time_us),
            end_utc: observe::iso_utc(track.points[track.points.len() - 1].time_us),
            steps,
            steps_per_state: per_state,
            fixes: rows.len(),
            heading_redraws: track.heading_redraws,
            stays: track.stays,
        });
        fixes.extend(rows);
        animals.push(DemoAnimal {
            id,
            tag: p.tag,
            site: SITES[p.site].0.to_string(),
            sex: if i % 2 == 0 { "F" } else { "M" }.to_string(),
            age_class: if i % 4 == 3 { "juvenile" } else { "adult" }.to_string(),
            track,
        });
    }
    drop(env);
    let truth = truth_of(o, &names, animal_truth, faults);
    Ok(Demo {
        landscape,
        animals,
        fixes,
        truth,
    })
}

fn truth_of(
    o: &DemoOptions,
    names: &[String],
    animals: Vec<AnimalTruth>,
    faults: Vec<truth::PlantedFault>,
) -> Truth {
    use movement::{ANGLE_VON_MISES, BETA, COVARIATE_UNITS, STATES, STEP_GAMMA};
    let definitions = [
        format!(
            "share of seabed cells of habitat.tif in class kelp (code 1) among the non-land cells whose centres lie within {} m (circle) of the position",
            landscape::KELP_RADIUS_M
        ),
        "water depth from depth.tif (metres, positive down), bilinear between 100 m cell centres"
            .to_string(),
        format!("cos(2π·h/24), h = local clock hour in {TIMEZONE}"),
        format!("sin(2π·h/24), h = local clock hour in {TIMEZONE}"),
    ];
    let columns = ["habitat_kelp", "depth", "local_hour", "local_hour"];
    let covariates: Vec<CovariateTruth> = (0..names.len())
        .map(|k| CovariateTruth {
            name: names[k].clone(),
            column: columns[k].to_string(),
            unit: COVARIATE_UNITS[k].to_string(),
            definition: definitions[k].clone(),
        })
        .collect();
    let pers = [
        "per unit of proportion (0 to 1)",
        "per metre",
        "per unit",
        "per unit",
    ];
    let mut transitions = Vec::new();
    let mut rows = BETA.iter();
    for (i, from) in STATES.iter().enumerate() {
        for (j, to) in STATES.iter().enumerate() {
            if i == j {
                continue;
            }
            let b = rows.next().expect("one row per off-diagonal pair");
            transitions.push(TransitionTruth {
                from: from.to_string(),
                to: to.to_string(),
                intercept: b[0],
                coefficients: (0..names.len())
                    .map(|k| Coefficient {
                        covariate: names[k].clone(),
                        value: b[k + 1],
                        per: pers[k].to_string(),
                    })
                    .collect(),
            });
        }
    }
    Truth {
        synthetic: true,
        scenario: format!(
            "{FJORD} is an invented high-latitude fjord and the {SPECIES} an invented coastal diving predator; every track, tag record and raster here is simulated"
        ),
        size: o.size.label().to_string(),
        seed: o.seed,
        crs_epsg: u32::from(landscape::EPSG),
        timezone: TIMEZONE.to_string(),
        step_interval_s: movement::STEP_S as f64,
        transition_convention: "multinomial logit per row of Γ with the diagonal as reference: Γ_ij(x) = exp(η_ij) / Σ_k exp(η_ik), η_ii = 0, η_ij = intercept + Σ coefficient·covariate; the covariates at step t (the animal's true position and time at t) govern the switch from the state at t to the state at t + 1".into(),
        true_candidate: TRUE_CANDIDATE.to_string(),
        states: (0..STATES.len())
            .map(|s| StateTruth {
                label: STATES[s].to_string(),
                step_mean_m: STEP_GAMMA[s].0,
                step_sd_m: STEP_GAMMA[s].1,
                angle_mean_rad: ANGLE_VON_MISES[s].0,
                angle_concentration: ANGLE_VON_MISES[s].1,
            })
            .collect(),
        covariates,
        transitions,
        initial_state: "drawn from the stationary distribution of Γ at the first position and time".into(),
        land_rule: format!(
            "a step ending within 1 km of the rasters' edges, where depth or kelp proportion is undefined, or within 150 m of where depth is undefined (the shore), or whose straight path crosses land, has its turning angle redrawn, {} times from the state's von Mises and then uniformly, up to {} times in all, after which the animal stays put for that hour; step lengths are kept. Redrawing rejects headings toward the shore, so turning angles near coasts are less concentrated around 0 than the von Mises says",
            movement::VON_MISES_TRIES,
            movement::MAX_REDRAWS
        ),
        observation_model: "Fastloc-GPS: fixes 1 h plus an exponential wait of mean 1.2 h apart (at most 4 h), 4 % chance of a 9-16 h gap, normal errors with a per-fix sd of 30-70 m per axis. Argos: locations 5 min plus an exponential wait of mean 1.6 h apart, 3 % chance of a 9-14 h gap, classes 3/2/1/0/A/B/Z with shares 7/9/11/16/22/33/2 %, errors = cairn's default class sd (x, y) times t(4)/sqrt(2), Z three times class B. True positions interpolated linearly between the hourly points".into(),
        animals,
        faults,
    }
}

/// Layout of a demo raster.
fn layout(cell: f64, w: usize, h: usize, nodata: &str) -> GeoTiffLayout<'_> {
    GeoTiffLayout {
        width: w as u32,
        height: h as u32,
        x0: landscape::X0,
        y0: landscape::Y0,
        cell,
        epsg: landscape::EPSG,
        geographic: false,
        nodata,
        matrix: None,
        pixel_is_point: false,
    }
}

fn put_text(path: &Path, text: &str) -> Result<(), WriteError> {
    write_atomic(path, |w| {
        w.write_all(text.as_bytes()).map_err(|e| e.to_string())
    })
}

/// Generates the demo and writes it into `dir` (created if needed), each file
/// atomically; existing files of the same names are replaced.
///
/// # Errors
/// [`DemoError::Write`] naming the file that could not be written; the other variants as
/// for [`generate`].
pub fn write(dir: &Path, o: &DemoOptions) -> Result<DemoFiles, DemoError> {
    let d = generate(o)?;
    let files = DemoFiles::in_dir(dir);
    let l = &d.landscape;
    let RasterData::U8(classes) = l.habitat.data() else {
        unreachable!("the habitat raster is built as u8")
    };
    let spec = layout(
        landscape::HABITAT_CELL,
        l.habitat.width(),
        l.habitat.height(),
        "255",
    );
    write_atomic(&files.habitat, |w| {
        write_u8(w, &spec, classes, Compression::Deflate).map_err(|e| e.to_string())
    })?;
    let RasterData::F32(depth) = l.depth.data() else {
        unreachable!("the depth raster is built as f32")
    };
    let nodata = landscape::DEPTH_NODATA.to_string();
    let spec = layout(
        landscape::DEPTH_CELL,
        l.depth.width(),
        l.depth.height(),
        &nodata,
    );
    write_atomic(&files.depth, |w| {
        write_f32(w, &spec, depth, Compression::Deflate).map_err(|e| e.to_string())
    })?;
    put_text(&files.fixes, &fixes_csv(&d.fixes))?;
    put_text(&files.animals, &animals_csv(&d.animals))?;
    put_text(&files.true_track, &true_track_csv(&d))?;
    put_text(&files.study, &study_toml(o))?;
    put_text(&files.readme, &readme(o, &d))?;
    let json = serde_json::to_string_pretty(&d.truth).map_err(|e| WriteError {
        path: files.truth.clone(),
        reason: e.to_string(),
    })?;
    put_text(&files.truth, &(json + "\n"))?;
    Ok(files)
}

/// Reads `truth.json` back.
///
/// # Errors
/// [`DemoError::Read`] when the file cannot be read or is not a demo truth.
pub fn read_truth(path: &Path) -> Result<Truth, DemoError> {
    let fail = |reason: String| DemoError::Read {
        path: path.to_path_buf(),
        reason,
    };
    let text = std::fs::read_to_string(path).map_err(|e| fail(e.to_string()))?;
    serde_json::from_str(&text).map_err(|e| fail(e.to_string()))
}

fn fixes_csv(rows: &[FixRow]) -> String {
    let mut s = String::from("animal,time,lon,lat,lc,tag\n");
    for r in rows {
        let _ = writeln!(
            s,
            "{},{},{:.6},{:.6},{},{}",
            r.animal,
            r.time,
            r.lon,
            r.lat,
            r.lc,
            r.tag.label()
        );
    }
    s
}

fn animals_csv(animals: &[DemoAnimal]) -> String {
    let mut s = String::from("animal,sex,age_class,tag_type,site\n");
    for a in animals {
        let _ = writeln!(
            s,
            "{},{},{},{},{}",
            a.id,
            a.sex,
            a.age_class,
            a.tag.label(),
            a.site
        );
    }
    s
}

/// A number with `decimals`, or nothing for NaN.
fn num(v: f64, decimals: usize) -> String {
    if v.is_nan() {
        String::new()
    } else {
        format!("{v:.decimals$}")
    }
}

fn true_track_csv(d: &Demo) -> String {
    let mut s = String::from(
        "animal,time_utc,lon,lat,x_utm34n,y_utm34n,state,habitat_kelp,depth_m,local_hour,step_m,turn_rad,moved\n",
    );
    for a in &d.animals {
        for p in &a.track.points {
            let (lon, lat) = d
                .landscape
                .utm
                .inverse(p.x, p.y)
                .expect("true positions invert");
            let _ = writeln!(
                s,
                "{},{},{lon:.6},{lat:.6},{:.1},{:.1},{},{},{},{},{},{},{}",
                a.id,
                observe::iso_utc(p.time_us),
                p.x,
                p.y,
                movement::STATES[p.state],
                num(p.kelp, 4),
                num(p.depth_m, 2),
                num(p.local_hour, 3),
                num(p.step_m, 1),
                num(p.turn_rad, 4),
                p.moved
            );
        }
    }
    s
}

fn study_toml(o: &DemoOptions) -> String {
    let classes = landscape::CLASSES
        .iter()
        .map(|(code, name)| format!("{name} = [{code}]"))
        .collect::<Vec<_>>()
        .join(", ");
    let terms = |t: &[&str]| {
        t.iter()
            .map(|s| format!("\"{s}\""))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let states = terms(&movement::STATES);
    let true_terms = terms(&movement::TRUE_TERMS);
    let habitat_depth = terms(&movement::TRUE_TERMS[..2]);
    format!(
        r#"# {FJORD} demo study ({size}, seed {seed}). SYNTHETIC: the fjord, the {SPECIES}s,
# their tracks and the rasters are invented and simulated (see README.md, truth.json).
# Paths are relative to this file.

[study]
name = "{FJORD} {SPECIES}s (synthetic demo)"
output = "cairn-out"

[fixes]
files = ["fixes.csv"]
# Timestamps carry "Z" (UTC); the zone gives the local clock hour.
timezone = "{TIMEZONE}"

[fixes.columns]
animal = "animal"
time = "time"
lon = "lon"
lat = "lat"
class = "lc"
tag = "tag"

[cleaning]
max_speed = "3 m/s"
speed_filter = "speed-distance-angle"

[tracks]
gap = "8 h"

[grid]
interval = "1 h"
flag_se = "1 km"

[covariates]
hour = "clock"

[[covariates.raster]]
name = "habitat"
file = "habitat.tif"
kind = "classes"
radius = "{radius} m"
window = "circle"
classes = {{ {classes} }}

[[covariates.raster]]
name = "depth"
file = "depth.tif"
kind = "value"
unit = "m"
label = "water depth (positive down)"

[covariates.animals]
file = "animals.csv"
id = "animal"
columns = ["sex", "age_class", "tag_type", "site"]

[model]
states = [{states}]
step = "gamma"
angle = "von-mises"
starts = 6
seed = {model_seed}
select = "aic"

[[model.candidate]]
name = "no covariates"

[[model.candidate]]
name = "habitat and depth"
covariates = [{habitat_depth}]

# The form of the true model (truth.json).
[[model.candidate]]
name = "{TRUE_CANDIDATE}"
covariates = [{true_terms}]

[[model.candidate]]
name = "two states"
states = 2

[report]
hotspot_state = "foraging"
cell = "1 km"
brief_factor = 3
min_hours = "2 h"
min_animals = 3
# The true model, so the report can say how well the fit recovered it.
truth = "truth.json"

[output]
csv = true
"#,
        size = o.size.label(),
        seed = o.seed,
        radius = landscape::KELP_RADIUS_M,
        model_seed = o.seed & (i64::MAX as u64),
    )
}

fn readme(o: &DemoOptions, d: &Demo) -> String {
    let steps: usize = d.truth.animals.iter().map(|a| a.steps).sum();
    let argos = d.animals.iter().filter(|a| a.tag == Tag::Argos).count();
    format!(
        r#"# {FJORD}: a synthetic demo study

**Everything here is invented.** {FJORD} is not a real place and the {SPECIES} is not a
real species; the rasters, tracks and tag records were simulated by `cairn demo`
({size} size, seed {seed}). Use them to learn and test cairn, never as ecology.

## The scenario

{FJORD} winds 30 km eastward from the open sea at about 70.1° N, 19.4° E, with a
northern and a southern side arm and a scatter of islands and skerries. Kelp fringes the
shallow margins (< 20 m), rock and sand slope down to mud basins, and a deep channel runs
down the middle of the main fjord. At this latitude the sun stays below the horizon from
late November to mid-January and above it from late May to late July.

{n} {SPECIES}s, coastal diving predators that forage along kelp margins, were tagged at
five sites at dates spread over the year ({argos} with Argos tags, the rest with
Fastloc-GPS). Their true hourly tracks ({steps} steps) switch between resting, foraging
and travelling, more likely to forage where kelp is plentiful and water shallow, to rest
at night and to travel over deep water.

## Files

| file | contents |
|---|---|
| `study.toml` | the study file: cleaning, a 1 h grid, covariates, four candidate models |
| `fixes.csv` | tag records: animal, time (UTC), lon, lat, Argos class, tag type |
| `animals.csv` | sex, age class, tag type and deployment site of each animal |
| `habitat.tif` | seabed classes, 25 m cells, WGS84 / UTM 34N: 1 kelp, 2 rock, 3 sand, 4 mud, 5 deep channel, 255 land (nodata) |
| `depth.tif` | water depth in metres (positive down), 100 m cells, -9999 on land (nodata) |
| `truth.json` | the true model (per raw covariate unit), the observation model, planted faults |
| `true_track.csv` | hourly true positions, states and covariates |

The fixes contain faults on purpose (listed in `truth.json`): unparseable timestamps,
duplicate timestamps, Argos class Z locations and far spikes. The candidate
"{TRUE_CANDIDATE}" has the form of the true model, so a fit can be judged against
`truth.json`. Run `cairn prepare study.toml` and then `cairn fit study.toml`.
"#,
        size = o.size.label(),
        seed = o.seed,
        n = d.animals.len(),
    )
}
