//! The words of the reports that do not come from a table: the methods paragraph
//! (written for the model actually fitted), the references and the cautions.

use crate::hmm::FittedModel;
use crate::hmm::dists::Family;
use crate::modelling::FitStage;
use crate::study::Study;
use crate::study::model::Selection;
use crate::summaries::CountMethod;

fn family_words(f: Family) -> &'static str {
    match f {
        Family::Gamma => "gamma",
        Family::Weibull => "Weibull",
        Family::LogNormal => "log-normal",
        Family::VonMises => "von Mises",
        Family::WrappedCauchy => "wrapped Cauchy",
        Family::Normal => "normal",
        Family::Poisson => "Poisson",
    }
}

/// The methods paragraphs.
pub fn methods(
    study: &Study,
    stage: &FitStage,
    model: &FittedModel,
    method: CountMethod,
) -> Vec<String> {
    let mut out = Vec::new();
    let spec = model.model().valid_spec().spec().clone();
    let chosen = &stage.fits[stage.selected];
    // Data preparation.
    let mut prep = format!(
        "Fixes were read, validated row by row and cleaned with cairn {}: rows with unusable values were excluded and logged, Argos class Z locations were removed, duplicate timestamps kept the better-quality fix, and outliers were removed with a {} filter (Freitas et al. 2008; McConnell et al. 1992).",
        env!("CARGO_PKG_VERSION"),
        study.speed_filter()
    );
    if let Some(g) = study.grid() {
        prep.push_str(&format!(
            " Tracks were put on a regular {} grid with a continuous-time correlated random walk (Johnson et al. 2008) fitted by maximum likelihood to the fixes with their location error (per-class or error-ellipse variances), using a Kalman filter and smoother; nothing was predicted across gaps longer than {}.",
            hours(g.settings().interval_s),
            hours(study.gap_s())
        ));
    }
    prep.push_str(" Step lengths and turning angles were computed on the WGS84 ellipsoid (Karney 2013). The sun's position at each step came from the NREL solar position algorithm (Reda & Andreas 2004), and raster covariates from class proportions within a radius and bilinear interpolation.");
    out.push(prep);
    // The model.
    let streams: Vec<String> = spec
        .streams
        .iter()
        .map(|s| {
            format!(
                "{} ({}{})",
                if s.name == "step" {
                    "step length"
                } else {
                    "turning angle"
                },
                family_words(s.family),
                if s.zero_mass {
                    ", with a zero mass"
                } else {
                    ""
                }
            )
        })
        .collect();
    let cov = if chosen.covariates.is_empty() {
        "constant transition probabilities".to_string()
    } else {
        format!(
            "transition probabilities modelled by a multinomial logit with the diagonal as reference on {} (numeric covariates standardised; the covariate at step t governs the switch from the state at t to the state at t + 1)",
            chosen.covariates.join(", ")
        )
    };
    let select = match study.model().map(|m| &m.select) {
        Some(Selection::Bic) => "the lowest BIC".to_string(),
        Some(Selection::Named(n)) => format!("the study's choice (`{n}`)"),
        _ => "the lowest AIC".to_string(),
    };
    let starts = study.model().map_or(0, |m| m.starts);
    out.push(format!(
        "A hidden Markov model (Zucchini et al. 2016) with {} states ({}) was fitted to the steps of each animal and track segment as independent series sharing parameters: state-dependent {}; {}. Parameters were estimated by maximising the likelihood from the scaled forward algorithm with its exact gradient (L-BFGS), from {} random starts (seed {}). Among {} candidate models, the one with {} was selected. States are ordered by increasing mean step length. Standard errors come from the inverse of the numerically differentiated Hessian; intervals for derived quantities by simulation from the estimates' approximate normal distribution.",
        spec.n_states,
        chosen.candidate.labels.join(", "),
        streams.join(" and "),
        cov,
        starts,
        study.model().map_or(0, |m| m.seed),
        stage.fits.len(),
        select
    ));
    out.push(format!(
        "States were decoded with the Viterbi algorithm and local state probabilities (forward–backward). In budgets, hotspots and per-animal shares, {}. Hotspot grids use a Lambert azimuthal equal-area projection centred on the data. Model fit was checked with ordinary pseudo-residuals. Figures use the Okabe & Ito (2008) colour-blind-safe palette.",
        match method {
            CountMethod::LocalProbabilities => "time in a state is the sum of local state probabilities",
            CountMethod::Viterbi => "time in a state follows the Viterbi path",
        }
    ));
    out
}

fn hours(s: f64) -> String {
    if s % 3600.0 == 0.0 {
        format!("{} h", s / 3600.0)
    } else {
        format!("{} min", s / 60.0)
    }
}

/// The references the methods rely on.
pub fn references(study: &Study) -> Vec<String> {
    let mut r = vec![
        "Freitas, C., Lydersen, C., Fedak, M. A. & Kovacs, K. M. (2008). A simple new algorithm to filter marine mammal Argos locations. Marine Mammal Science 24, 315–325.".to_string(),
        "Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy 87, 43–55.".to_string(),
        "McConnell, B. J., Chambers, C. & Fedak, M. A. (1992). Foraging ecology of southern elephant seals in relation to the bathymetry and productivity of the Southern Ocean. Antarctic Science 4, 393–398.".to_string(),
        "Okabe, M. & Ito, K. (2008). Color Universal Design (CUD): how to make figures and presentations that are friendly to colorblind people. J*Fly.".to_string(),
        "Reda, I. & Andreas, A. (2004). Solar position algorithm for solar radiation applications. Solar Energy 76, 577–589.".to_string(),
        "Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models for Time Series: An Introduction Using R, 2nd ed. Chapman & Hall/CRC.".to_string(),
    ];
    if study.grid().is_some() {
        r.insert(
            1,
            "Johnson, D. S., London, J. M., Lea, M.-A. & Durban, J. W. (2008). Continuous-time correlated random walk model for animal telemetry data. Ecology 89, 1208–1215.".to_string(),
        );
    }
    r
}

/// The cautions every report and brief carries.
pub fn cautions() -> Vec<String> {
    vec![
        "The behavioural states are statistical inferences from movement data, not observations of behaviour; labels such as \"foraging\" are interpretations of the fitted step and turning patterns.".into(),
        "Results depend on the model's assumptions (the number of states, the distributions, independence of animals, covariates measured without error) and on the location error of the fixes; other reasonable choices can give different answers.".into(),
        "Associations with covariates are not causal effects, and apply to the animals, period and area sampled.".into(),
        "Locations of sensitive species must be generalised before sharing (coarse cells, a minimum number of animals per cell, no raw tracks); the shared map in the brief follows that rule.".into(),
        "Use these results within local regulations, permits and licensed practice; they do not replace the judgement of the responsible authority.".into(),
    ]
}
