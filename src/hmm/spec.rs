//! Model specification in three stages (as linfa separates parameters, checked
//! parameters and fitted models): [`ModelSpec`] is what the user writes (plain data,
//! serde-friendly); [`ValidSpec`] is the checked specification with the layout of the
//! working-parameter vector; the checks against a data set produce the internal
//! prepared data (features per observation, covariate columns in model order), so that
//! nothing downstream re-validates. [`Params`] holds natural-scale parameter values.
//!
//! Working-parameter layout (the optimiser's vector θ), in this order:
//! 1. for each stream, for each state j = 0..N, the family's working parameters
//!    (see [`Family::to_working`]); then, if the stream has a zero mass, N values
//!    logit(z_j);
//! 2. transition coefficients: for each off-diagonal pair (i, j), i-major, j ascending
//!    skipping i, the vector β_ij of length 1 + p (intercept first, then covariates in
//!    the order of [`ModelSpec::covariates`]);
//! 3. with an estimated initial distribution, N − 1 values w_k (k = 1..N) with
//!    δ = softmax(0, w_1, …, w_{N−1}).
//!
//! States are ordered by a documented rule ([`ValidSpec::order_states`]): increasing mean
//! of the first step-length stream (gamma, Weibull, log-normal), or failing that of the
//! first normal or Poisson stream; circular-only models keep the optimiser's order.

use serde::{Deserialize, Serialize};

use super::data::Data;
use super::dists::Family;
use super::error::HmmError;

/// One data stream of the model: which column of the data, which family, and whether
/// zero values get a per-state point mass (step lengths only).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StreamSpec {
    pub name: String,
    pub family: Family,
    #[serde(default)]
    pub zero_mass: bool,
}

impl StreamSpec {
    pub fn new(name: impl Into<String>, family: Family) -> Self {
        StreamSpec {
            name: name.into(),
            family,
            zero_mass: false,
        }
    }
    /// Adds a per-state zero mass (step-length families).
    pub fn with_zero_mass(mut self) -> Self {
        self.zero_mass = true;
        self
    }
}

/// How the distribution of the first state of each series is obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum InitialDistribution {
    /// Estimated (N − 1 free parameters, shared by all series).
    Estimated,
    /// The stationary distribution of Γ(x₀) at each series' first covariate row.
    Stationary,
}

/// What the user asks for (unchecked).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelSpec {
    pub n_states: usize,
    pub streams: Vec<StreamSpec>,
    /// Names of the covariates (columns of the design matrix) acting on transitions.
    #[serde(default)]
    pub covariates: Vec<String>,
    pub initial: InitialDistribution,
    /// Optional user labels of the states (after ordering).
    #[serde(default)]
    pub state_labels: Option<Vec<String>>,
}

impl ModelSpec {
    /// A specification with no covariates and an estimated initial distribution.
    pub fn new(n_states: usize, streams: Vec<StreamSpec>) -> Self {
        ModelSpec {
            n_states,
            streams,
            covariates: Vec::new(),
            initial: InitialDistribution::Estimated,
            state_labels: None,
        }
    }
    pub fn with_covariates(mut self, names: &[&str]) -> Self {
        self.covariates = names.iter().map(|s| s.to_string()).collect();
        self
    }
    pub fn with_initial(mut self, initial: InitialDistribution) -> Self {
        self.initial = initial;
        self
    }
    pub fn with_labels(mut self, labels: &[&str]) -> Self {
        self.state_labels = Some(labels.iter().map(|s| s.to_string()).collect());
        self
    }

    /// Structural checks that need no data.
    ///
    /// # Errors
    /// [`HmmError::InvalidStateCount`], [`HmmError::NoStreams`],
    /// [`HmmError::ZeroMassNotAllowed`], [`HmmError::LabelCount`], [`HmmError::DuplicateName`].
    pub fn check(&self) -> Result<ValidSpec, HmmError> {
        let n = self.n_states;
        if !(1..=6).contains(&n) {
            return Err(HmmError::InvalidStateCount(n));
        }
        if self.streams.is_empty() {
            return Err(HmmError::NoStreams);
        }
        let mut seen = std::collections::HashSet::new();
        for s in &self.streams {
            if s.zero_mass && !s.family.is_positive() {
                return Err(HmmError::ZeroMassNotAllowed(s.name.clone()));
            }
            if !seen.insert(s.name.as_str()) {
                return Err(HmmError::DuplicateName(s.name.clone()));
            }
        }
        for c in &self.covariates {
            if !seen.insert(c.as_str()) {
                return Err(HmmError::DuplicateName(c.clone()));
            }
        }
        if let Some(l) = &self.state_labels
            && l.len() != n
        {
            return Err(HmmError::LabelCount(l.len(), n));
        }
        let mut off = 0;
        let mut stream_offset = Vec::new();
        let mut zero_offset = Vec::new();
        for s in &self.streams {
            stream_offset.push(off);
            off += n * s.family.n_params();
            if s.zero_mass {
                zero_offset.push(Some(off));
                off += n;
            } else {
                zero_offset.push(None);
            }
        }
        let beta_offset = off;
        off += n * (n - 1) * (1 + self.covariates.len());
        let delta_offset = match self.initial {
            InitialDistribution::Estimated => {
                let d = off;
                off += n - 1;
                Some(d)
            }
            InitialDistribution::Stationary => None,
        };
        Ok(ValidSpec {
            spec: self.clone(),
            stream_offset,
            zero_offset,
            beta_offset,
            delta_offset,
            n_params: off,
        })
    }
}

/// Natural-scale values of one stream's parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StreamParams {
    /// per state, the family's natural parameters (see [`Family`])
    pub per_state: Vec<Vec<f64>>,
    /// per-state probability of a zero value, if the stream has a zero mass
    pub zero_mass: Option<Vec<f64>>,
}

/// Natural-scale parameters of a model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Params {
    pub streams: Vec<StreamParams>,
    /// Transition coefficients, one row of length 1 + p per off-diagonal pair (i, j)
    /// (i-major, j ascending skipping i), flattened. Use [`Params::beta_row`].
    pub beta: Vec<f64>,
    /// Initial distribution when it is estimated.
    pub delta: Option<Vec<f64>>,
}

/// Index of the row of off-diagonal pair (i, j) in the transition coefficients.
pub fn beta_row(n: usize, i: usize, j: usize) -> usize {
    debug_assert!(i != j);
    i * (n - 1) + if j < i { j } else { j - 1 }
}

impl Params {
    /// Coefficients (intercept, covariates…) of the linear predictor of Γ_ij.
    pub fn beta_row(&self, n_states: usize, i: usize, j: usize) -> &[f64] {
        let k = self.beta.len() / (n_states * (n_states - 1)).max(1);
        let r = beta_row(n_states, i, j);
        &self.beta[r * k..(r + 1) * k]
    }
}

/// A checked specification with the layout of the working-parameter vector.
#[derive(Debug, Clone, PartialEq)]
pub struct ValidSpec {
    spec: ModelSpec,
    pub(crate) stream_offset: Vec<usize>,
    pub(crate) zero_offset: Vec<Option<usize>>,
    pub(crate) beta_offset: usize,
    pub(crate) delta_offset: Option<usize>,
    n_params: usize,
}

/// Data prepared for one model: features per observation and covariates in model order.
#[derive(Debug, Clone)]
pub(crate) struct Prepared {
    pub series: Vec<PSeries>,
    pub n_steps: usize,
    /// per stream: number of non-missing values, number of distinct values (capped at N + 1)
    n_present: Vec<usize>,
    n_distinct: Vec<usize>,
    /// per model covariate: constant over all rows
    cov_constant: Vec<bool>,
}

impl Prepared {
    /// The first `keep(T)` steps of every series (at most T, at least 1), for the
    /// warm-up of a fit on a part of the data. Series are independent, so this is the
    /// likelihood of a smaller data set of the same animals. The estimability counts are
    /// those of the full data (the warm-up does not check them: a warm-up that fails
    /// only falls back to the full data).
    pub(crate) fn prefixes(&self, keep: impl Fn(usize) -> usize) -> Prepared {
        let series: Vec<PSeries> = self
            .series
            .iter()
            .map(|s| {
                let t = keep(s.len).clamp(1, s.len.max(1)).min(s.len);
                let p = s.cov.len().checked_div(s.len).unwrap_or(0);
                PSeries {
                    id: s.id.clone(),
                    len: t,
                    feats: s.feats.iter().map(|f| f[..t].to_vec()).collect(),
                    cov: s.cov[..t * p].to_vec(),
                }
            })
            .collect();
        Prepared {
            n_steps: series.iter().map(|s| s.len).sum(),
            series,
            n_present: self.n_present.clone(),
            n_distinct: self.n_distinct.clone(),
            cov_constant: self.cov_constant.clone(),
        }
    }
}

#[derive(Debug, Clone)]
pub(crate) struct PSeries {
    pub id: String,
    pub len: usize,
    /// [stream][t] → two features (NaN first feature = missing)
    pub feats: Vec<Vec<[f64; 2]>>,
    /// T × p row-major, columns in the model's covariate order
    pub cov: Vec<f64>,
}

fn logit(p: f64) -> f64 {
    (p / (1.0 - p)).ln()
}

impl ValidSpec {
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }
    pub fn n_states(&self) -> usize {
        self.spec.n_states
    }
    pub fn n_covariates(&self) -> usize {
        self.spec.covariates.len()
    }
    /// Length of the working-parameter vector.
    pub fn n_params(&self) -> usize {
        self.n_params
    }
    /// State labels: the user's, or "state 1", "state 2", ….
    pub fn state_labels(&self) -> Vec<String> {
        self.spec.state_labels.clone().unwrap_or_else(|| {
            (1..=self.n_states())
                .map(|k| format!("state {k}"))
                .collect()
        })
    }

    /// Names of the working parameters, in the layout order (see the module docs).
    pub fn working_names(&self) -> Vec<String> {
        let initial = (1..self.n_states())
            .map(|k| format!("initial: log(delta {}/delta 1)", k + 1))
            .collect();
        self.parameter_names(Family::working_names, "logit(zero mass)", initial)
    }

    /// Names of the natural parameters in the order of [`ValidSpec::natural_vector`].
    pub fn natural_names(&self) -> Vec<String> {
        let initial = (0..self.n_states())
            .map(|k| format!("initial: delta {}", k + 1))
            .collect();
        self.parameter_names(Family::param_names, "zero mass", initial)
    }

    /// Parameter names in layout order: per stream the family's parameters per state and
    /// the zero masses, then the transition coefficients, then (when estimated) the
    /// initial distribution, named by `initial`.
    fn parameter_names(
        &self,
        family_names: fn(Family) -> &'static [&'static str],
        zero_mass: &str,
        initial: Vec<String>,
    ) -> Vec<String> {
        let n = self.n_states();
        let mut names = Vec::with_capacity(self.n_params);
        for s in &self.spec.streams {
            for j in 0..n {
                for w in family_names(s.family) {
                    names.push(format!("{}: {} [state {}]", s.name, w, j + 1));
                }
            }
            if s.zero_mass {
                for j in 0..n {
                    names.push(format!("{}: {zero_mass} [state {}]", s.name, j + 1));
                }
            }
        }
        for i in 0..n {
            for j in (0..n).filter(|&j| j != i) {
                names.push(format!("beta {}->{}: intercept", i + 1, j + 1));
                for c in &self.spec.covariates {
                    names.push(format!("beta {}->{}: {}", i + 1, j + 1, c));
                }
            }
        }
        if self.delta_offset.is_some() {
            names.extend(initial);
        }
        names
    }

    /// Natural-scale parameters flattened in the order of [`ValidSpec::natural_names`].
    pub fn natural_vector(&self, p: &Params) -> Vec<f64> {
        let mut v = Vec::new();
        for (s, sp) in self.spec.streams.iter().zip(&p.streams) {
            for st in &sp.per_state {
                v.extend_from_slice(&st[..s.family.n_params()]);
            }
            if let Some(z) = &sp.zero_mass {
                v.extend_from_slice(z);
            }
        }
        v.extend_from_slice(&p.beta);
        if let Some(d) = &p.delta {
            v.extend_from_slice(d);
        }
        v
    }

    /// Natural parameters → working vector θ.
    ///
    /// # Errors
    /// [`HmmError::InvalidParameter`] naming the parameter outside its domain, or a
    /// shape mismatch.
    pub fn to_working(&self, p: &Params) -> Result<Vec<f64>, HmmError> {
        let n = self.n_states();
        let bad = |name: String, reason: String| HmmError::InvalidParameter { name, reason };
        if p.streams.len() != self.spec.streams.len() {
            return Err(bad("streams".into(), "one entry per stream needed".into()));
        }
        let mut th = vec![0.0; self.n_params];
        for (k, (s, sp)) in self.spec.streams.iter().zip(&p.streams).enumerate() {
            if sp.per_state.len() != n {
                return Err(bad(s.name.clone(), format!("{n} states expected")));
            }
            let np = s.family.n_params();
            for (j, st) in sp.per_state.iter().enumerate() {
                if st.len() < np {
                    return Err(bad(s.name.clone(), format!("{np} parameters per state")));
                }
                let w = s
                    .family
                    .to_working(st)
                    .map_err(|e| bad(format!("{} [state {}]", s.name, j + 1), e))?;
                let o = self.stream_offset[k] + j * np;
                th[o..o + np].copy_from_slice(&w[..np]);
            }
            match (self.zero_offset[k], &sp.zero_mass) {
                (Some(o), Some(z)) if z.len() == n => {
                    for (j, &zj) in z.iter().enumerate() {
                        if !(zj > 0.0 && zj < 1.0) {
                            return Err(bad(
                                format!("{}: zero mass [state {}]", s.name, j + 1),
                                format!("must be in (0, 1), got {zj}"),
                            ));
                        }
                        th[o + j] = logit(zj);
                    }
                }
                (None, None) => {}
                _ => {
                    return Err(bad(
                        s.name.clone(),
                        "zero mass does not match the spec".into(),
                    ));
                }
            }
        }
        let nb = n * (n - 1) * (1 + self.n_covariates());
        if p.beta.len() != nb {
            return Err(bad("beta".into(), format!("{nb} coefficients expected")));
        }
        if let Some(b) = p.beta.iter().find(|b| !b.is_finite()) {
            return Err(bad("beta".into(), format!("non-finite coefficient {b}")));
        }
        th[self.beta_offset..self.beta_offset + nb].copy_from_slice(&p.beta);
        match (self.delta_offset, &p.delta) {
            (Some(o), Some(d)) if d.len() == n => {
                if d.iter().any(|&x| x <= 0.0) {
                    return Err(bad(
                        "delta".into(),
                        "initial probabilities must be > 0".into(),
                    ));
                }
                for k in 1..n {
                    th[o + k - 1] = (d[k] / d[0]).ln();
                }
            }
            (None, _) => {}
            _ => {
                return Err(bad(
                    "delta".into(),
                    format!("{n} initial probabilities expected"),
                ));
            }
        }
        Ok(th)
    }

    /// Working vector θ → natural parameters.
    pub fn to_natural(&self, th: &[f64]) -> Params {
        let n = self.n_states();
        let mut streams = Vec::new();
        for (k, s) in self.spec.streams.iter().enumerate() {
            let np = s.family.n_params();
            let per_state = (0..n)
                .map(|j| {
                    let o = self.stream_offset[k] + j * np;
                    let mut w = [0.0; 2];
                    w[..np].copy_from_slice(&th[o..o + np]);
                    s.family.to_natural(&w)[..np].to_vec()
                })
                .collect();
            let zero_mass = self.zero_offset[k]
                .map(|o| (0..n).map(|j| 1.0 / (1.0 + (-th[o + j]).exp())).collect());
            streams.push(StreamParams {
                per_state,
                zero_mass,
            });
        }
        let nb = n * (n - 1) * (1 + self.n_covariates());
        let beta = th[self.beta_offset..self.beta_offset + nb].to_vec();
        let delta = self.delta_offset.map(|o| softmax_ref(&th[o..o + n - 1]));
        Params {
            streams,
            beta,
            delta,
        }
    }

    /// Permutes the states: new state k is old state `perm[k]`.
    pub fn permute(&self, p: &Params, perm: &[usize]) -> Params {
        let n = self.n_states();
        let k = 1 + self.n_covariates();
        let streams = p
            .streams
            .iter()
            .map(|sp| StreamParams {
                per_state: perm.iter().map(|&o| sp.per_state[o].clone()).collect(),
                zero_mass: sp
                    .zero_mass
                    .as_ref()
                    .map(|z| perm.iter().map(|&o| z[o]).collect()),
            })
            .collect();
        let mut beta = vec![0.0; p.beta.len()];
        for i in 0..n {
            for j in (0..n).filter(|&j| j != i) {
                let (oi, oj) = (perm[i], perm[j]);
                let src = beta_row(n, oi, oj) * k;
                let dst = beta_row(n, i, j) * k;
                beta[dst..dst + k].copy_from_slice(&p.beta[src..src + k]);
            }
        }
        let delta = p
            .delta
            .as_ref()
            .map(|d| perm.iter().map(|&o| d[o]).collect());
        Params {
            streams,
            beta,
            delta,
        }
    }

    /// The documented state order: returns `perm` with new state k = old state perm[k],
    /// sorting by increasing mean of the first step-length stream (else the first
    /// normal/Poisson stream); identity when no stream has a mean.
    pub fn order_states(&self, p: &Params) -> Vec<usize> {
        let n = self.n_states();
        let key_stream = self
            .spec
            .streams
            .iter()
            .position(|s| s.family.is_positive())
            .or_else(|| {
                self.spec
                    .streams
                    .iter()
                    .position(|s| s.family.mean(&[1.0, 1.0]).is_some())
            });
        let mut perm: Vec<usize> = (0..n).collect();
        if let Some(k) = key_stream {
            let fam = self.spec.streams[k].family;
            let means: Vec<f64> = p.streams[k]
                .per_state
                .iter()
                .map(|st| fam.mean(st).unwrap_or(f64::NAN))
                .collect();
            perm.sort_by(|&a, &b| means[a].total_cmp(&means[b]));
        }
        perm
    }

    /// Checks `data` against this specification and prepares the features.
    ///
    /// # Errors
    /// Unknown stream or covariate, non-finite covariate, negative values or zeros
    /// without a zero mass in a step-length stream, invalid counts or non-finite values.
    /// The estimation-only checks are in [`ValidSpec::check_estimable`].
    pub(crate) fn prepare(&self, data: &Data) -> Result<Prepared, HmmError> {
        let list = |v: &[String]| v.join(", ");
        let mut stream_idx = Vec::new();
        for s in &self.spec.streams {
            let k = data
                .stream_names()
                .iter()
                .position(|n| *n == s.name)
                .ok_or_else(|| HmmError::UnknownStream {
                    name: s.name.clone(),
                    available: list(data.stream_names()),
                })?;
            stream_idx.push(k);
        }
        let mut cov_idx = Vec::new();
        for c in &self.spec.covariates {
            let k = data
                .covariate_names()
                .iter()
                .position(|n| n == c)
                .ok_or_else(|| HmmError::UnknownCovariate {
                    name: c.clone(),
                    available: list(data.covariate_names()),
                })?;
            cov_idx.push(k);
        }
        let p_all = data.covariate_names().len();
        let p = cov_idx.len();
        let mut series = Vec::new();
        let mut n_steps = 0;
        let mut cov_min = vec![f64::INFINITY; p];
        let mut cov_max = vec![f64::NEG_INFINITY; p];
        let mut n_present = vec![0usize; self.spec.streams.len()];
        let mut distinct: Vec<Vec<f64>> = vec![Vec::new(); self.spec.streams.len()];
        for s in data.series().iter().filter(|s| !s.is_empty()) {
            let t_len = s.len();
            n_steps += t_len;
            let mut cov = Vec::with_capacity(t_len * p);
            for t in 0..t_len {
                for (c, &k) in cov_idx.iter().enumerate() {
                    let v = s.covariates()[t * p_all + k];
                    if !v.is_finite() {
                        return Err(HmmError::NonFiniteCovariate {
                            name: self.spec.covariates[c].clone(),
                            series: s.id().to_string(),
                            row: t,
                            value: v,
                        });
                    }
                    cov_min[c] = cov_min[c].min(v);
                    cov_max[c] = cov_max[c].max(v);
                    cov.push(v);
                }
            }
            let mut feats = Vec::new();
            for (m, (spec, &k)) in self.spec.streams.iter().zip(&stream_idx).enumerate() {
                let fam = spec.family;
                let x = s.stream(k);
                let mut f = Vec::with_capacity(t_len);
                for (t, &v) in x.iter().enumerate() {
                    let err = |reason: &str| HmmError::InvalidValue {
                        stream: spec.name.clone(),
                        series: s.id().to_string(),
                        row: t,
                        value: v,
                        reason: reason.into(),
                    };
                    if v.is_nan() {
                        f.push(fam.features(v));
                        continue;
                    }
                    if !v.is_finite() {
                        return Err(err("not finite (use NaN for missing)"));
                    }
                    if fam.is_positive() || fam == Family::Poisson {
                        if v < 0.0 {
                            return Err(HmmError::NegativeValue {
                                stream: spec.name.clone(),
                                family: format!("{fam:?}"),
                                series: s.id().to_string(),
                                row: t,
                                value: v,
                            });
                        }
                        if v == 0.0 && fam.is_positive() && !spec.zero_mass {
                            return Err(HmmError::ZeroWithoutZeroMass {
                                stream: spec.name.clone(),
                                series: s.id().to_string(),
                                row: t,
                            });
                        }
                    }
                    if fam == Family::Poisson && v.fract() != 0.0 {
                        return Err(err("counts must be whole numbers"));
                    }
                    n_present[m] += 1;
                    if distinct[m].len() <= self.n_states() && !distinct[m].contains(&v) {
                        distinct[m].push(v);
                    }
                    f.push(fam.features(v));
                }
                feats.push(f);
            }
            series.push(PSeries {
                id: s.id().to_string(),
                len: t_len,
                feats,
                cov,
            });
        }
        if series.is_empty() {
            return Err(HmmError::NoData);
        }
        let n_distinct = distinct.iter().map(Vec::len).collect();
        let cov_constant = (0..p).map(|c| cov_min[c] == cov_max[c]).collect();
        Ok(Prepared {
            series,
            n_steps,
            n_present,
            n_distinct,
            cov_constant,
        })
    }

    /// Checks that only matter for estimation (decoding or simulating a given model on
    /// a single short series is fine): a stream that is missing everywhere, fewer
    /// distinct values than states, fewer observations than parameters, a constant
    /// covariate.
    ///
    /// # Errors
    /// [`HmmError::StreamAllMissing`], [`HmmError::TooManyStates`],
    /// [`HmmError::ConstantCovariate`].
    pub(crate) fn check_estimable(&self, prep: &Prepared) -> Result<(), HmmError> {
        for (m, spec) in self.spec.streams.iter().enumerate() {
            if prep.n_present[m] == 0 {
                return Err(HmmError::StreamAllMissing(spec.name.clone()));
            }
            if prep.n_distinct[m] < self.n_states() {
                return Err(HmmError::TooManyStates {
                    n_states: self.n_states(),
                    what: format!("distinct values in stream '{}'", spec.name),
                    needed: self.n_states(),
                    available: prep.n_distinct[m],
                });
            }
        }
        let n_obs: usize = prep.n_present.iter().sum();
        if n_obs <= self.n_params {
            return Err(HmmError::TooManyStates {
                n_states: self.n_states(),
                what: "observations (more than the number of parameters)".into(),
                needed: self.n_params + 1,
                available: n_obs,
            });
        }
        for (c, &constant) in prep.cov_constant.iter().enumerate() {
            if constant {
                return Err(HmmError::ConstantCovariate(self.spec.covariates[c].clone()));
            }
        }
        Ok(())
    }
}

/// softmax(0, w…): probabilities with the first as reference.
pub(crate) fn softmax_ref(w: &[f64]) -> Vec<f64> {
    let m = w.iter().copied().fold(0.0_f64, f64::max);
    let mut v: Vec<f64> = std::iter::once((-m).exp())
        .chain(w.iter().map(|x| (x - m).exp()))
        .collect();
    let s: f64 = v.iter().sum();
    v.iter_mut().for_each(|x| *x /= s);
    v
}
