//! The run configuration (TOML), read once and checked before any work starts.
//!
//! The key names are a contract with users' scripts. Unknown keys are rejected so that a
//! misspelt key never silently falls back to a default. Paths are resolved against the
//! config file's folder so a config can be run from anywhere.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

pub use crate::data::dates::AgeBasis;
use crate::data::{PathsOutput, Sex, Span};
use crate::error::{Error, Result};
use crate::hedge::HedgeConfig;
pub use crate::interest::Timing;
pub use crate::series::CohortSeriesKind;

/// Why a config with hedges needs stochastic scenarios (`projection.noise`).
pub const HEDGES_NEED_NOISE: &str = "hedges are priced on stochastic scenarios: set `noise = true`";

/// The whole configuration file.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Config {
    /// Inputs and the fitting window.
    pub data: DataConfig,
    /// Which models to fit and how.
    #[serde(default)]
    pub model: ModelConfig,
    /// Scenario generation.
    #[serde(default)]
    pub projection: ProjectionConfig,
    /// Book valuation.
    #[serde(default)]
    pub valuation: ValuationConfig,
    /// Capital measures.
    #[serde(default)]
    pub capital: CapitalConfig,
    /// Where results go.
    #[serde(default)]
    pub output: OutputConfig,
    /// Longevity hedges to price (optional).
    #[serde(default)]
    pub hedge: Option<HedgeConfig>,
    /// The book's own mortality against the population (optional).
    #[serde(default)]
    pub basis: Option<BasisConfig>,
    /// Folder of the config file; input and output paths are relative to it.
    #[serde(skip)]
    pub base: PathBuf,
    /// The config file itself, for messages.
    #[serde(skip)]
    pub file: PathBuf,
}

/// `[data]`: input files and the fitted window.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct DataConfig {
    /// Experience CSV or spreadsheet (`year,age,sex,deaths,exposure`); or give
    /// `deaths` and `exposures` instead.
    #[serde(default)]
    pub experience: Option<PathBuf>,
    /// Published deaths table (`Year Age Female Male Total`), with `exposures`.
    #[serde(default)]
    pub deaths: Option<PathBuf>,
    /// Published exposures table, with `deaths`.
    #[serde(default)]
    pub exposures: Option<PathBuf>,
    /// Book CSV (`id,sex,age,amount,...`); optional for fit/project-only runs.
    #[serde(default)]
    pub book: Option<PathBuf>,
    /// A candidate tranche (same layout as the book) whose marginal capital against the
    /// book is reported when `capital.allocation` is on.
    #[serde(default)]
    pub candidate_book: Option<PathBuf>,
    /// Fitted ages, inclusive `[first, last]`.
    pub ages: [i32; 2],
    /// Fitted calendar years, inclusive `[first, last]`.
    pub years: [i32; 2],
    /// Sexes to fit and project.
    #[serde(default = "default_sexes")]
    pub sexes: Vec<Sex>,
    /// The book's own deaths and exposures (`year,age,sex,deaths,exposure`), for `[basis]`.
    #[serde(default)]
    pub book_experience: Option<PathBuf>,
}

/// How the book's mortality is related to the population's (`[basis] kind`).
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum BasisKind {
    /// log m_book = log m̂_pop + α0 + α1 (x − x̄) + κ_t, κ_t a mean-zero AR(1).
    Relative,
    /// Li & Lee (2005) augmented common factor for two large populations.
    LiLee,
}

/// `[basis]`: the book's own level, slope and spread against the population.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct BasisConfig {
    /// The relation between the book and the population.
    pub kind: BasisKind,
    /// Draw (α0, α1) per scenario from their estimated normal distribution.
    #[serde(default)]
    pub level_uncertainty: bool,
    /// Project the spread κ_t stochastically (otherwise on its expected path).
    #[serde(default)]
    pub spread: bool,
}

/// A single model kind or a list of them.
#[derive(Debug, Clone, Serialize, PartialEq)]
#[serde(untagged)]
pub enum KindList {
    /// One kind.
    One(ModelKind),
    /// Several kinds, fitted and ranked, each projected and valued side by side.
    Many(Vec<ModelKind>),
}

impl<'de> Deserialize<'de> for KindList {
    /// A name or a list of names, each read as a [`ModelKind`] so that a misspelt kind is
    /// reported as an unknown variant with the known ones (an untagged enum would only say
    /// that nothing matched).
    fn deserialize<D: serde::Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Names {
            One(String),
            Many(Vec<String>),
        }
        let kind = |name: String| {
            use serde::de::IntoDeserializer;
            let name: serde::de::value::StringDeserializer<D::Error> = name.into_deserializer();
            ModelKind::deserialize(name)
        };
        match Names::deserialize(deserializer)? {
            Names::One(name) => kind(name).map(KindList::One),
            Names::Many(names) => names
                .into_iter()
                .map(kind)
                .collect::<Result<_, _>>()
                .map(KindList::Many),
        }
    }
}

/// Mortality model families.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum ModelKind {
    /// Lee–Carter: log m = a_x + b_x k_t.
    LeeCarter,
    /// Cairns–Blake–Dowd (M5): logit q = k1_t + (x − x̄) k2_t.
    Cbd,
    /// Age–period–cohort: log m = a_x + k_t + γ_{t−x}.
    Apc,
    /// Renshaw–Haberman: log m = a_x + b_x k_t + b0_x γ_{t−x}.
    RenshawHaberman,
    /// CBD with cohort (M6): logit q = k1_t + (x − x̄) k2_t + γ_{t−x}.
    M6,
    /// CBD with cohort and curvature (M7): M6 + k3_t ((x − x̄)² − σ̂²).
    M7,
}

impl ModelKind {
    /// The name used in files and messages.
    pub fn name(self) -> &'static str {
        match self {
            ModelKind::LeeCarter => "lee-carter",
            ModelKind::Cbd => "cbd",
            ModelKind::Apc => "apc",
            ModelKind::RenshawHaberman => "renshaw-haberman",
            ModelKind::M6 => "m6",
            ModelKind::M7 => "m7",
        }
    }

    /// Whether the model has a cohort effect γ_{t−x}.
    pub fn has_cohort(self) -> bool {
        !matches!(self, ModelKind::LeeCarter | ModelKind::Cbd)
    }
}

/// How the cohort effect of the Renshaw–Haberman model is loaded on each age.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum CohortLoading {
    /// A fitted age loading b0_x with Σ b0_x = 1 (Renshaw & Haberman 2006).
    Free,
    /// The common simplification b0_x = 1 at every age.
    Unit,
}

/// How a model's parameters are estimated.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum FitMethod {
    /// Singular value decomposition of centred log rates (Lee & Carter 1992).
    Svd,
    /// Poisson maximum likelihood (Brouhns, Denuit & Vermunt 2002).
    Poisson,
    /// Binomial maximum likelihood on initial exposures (CBD).
    Binomial,
}

/// Old-age closure above the top fitted age.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum ClosureKind {
    /// Kannisto logistic law fitted to the top fitted ages.
    Kannisto,
}

/// `[model]`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ModelConfig {
    /// Model kind(s); the first is the one projected.
    #[serde(default = "default_kind")]
    pub kind: KindList,
    /// Lee–Carter fit method (`svd` or `poisson`); CBD always fits `binomial`.
    #[serde(default)]
    pub fit: Option<FitMethod>,
    /// Re-estimate k_t after an SVD fit so fitted deaths match observed deaths each year.
    #[serde(default)]
    pub refit_kt: bool,
    /// Old-age closure law.
    #[serde(default = "default_closure")]
    pub closure: ClosureKind,
    /// Number of top fitted ages the closure law is fitted to (default 10, or all fitted
    /// ages when fewer).
    #[serde(default = "default_closure_fit_ages")]
    pub closure_fit_ages: usize,
    /// Highest age; q is 1 there.
    #[serde(default = "default_max_age")]
    pub max_age: i32,
    /// Convergence tolerance on the change in log-likelihood between iterations.
    #[serde(default = "default_tolerance")]
    pub tolerance: f64,
    /// Iteration cap for iterative fits; hitting it is an error.
    #[serde(default = "default_max_iterations")]
    pub max_iterations: usize,
    /// Renshaw–Haberman: `free` fits b0_x, `unit` fixes b0_x = 1.
    #[serde(default = "default_cohort_loading")]
    pub cohort_loading: CohortLoading,
    /// Cohorts seen in fewer cells of the age × year grid are not estimated from the data.
    #[serde(default = "default_min_cohort_cells")]
    pub min_cohort_cells: usize,
    /// Time-series model of the cohort index.
    #[serde(default = "default_cohort_series")]
    pub cohort_series: CohortSeriesKind,
    /// Weights of the listed kinds in the model-averaged distribution, in `kind`'s order
    /// (default: BIC weights).
    #[serde(default)]
    pub weights: Option<Vec<f64>>,
}

/// Parameter uncertainty switch: `true`/`false` or a named method.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(untagged)]
pub enum UncertaintySetting {
    /// `true` means drift uncertainty; `false` means none.
    Switch(bool),
    /// A named method.
    Method(UncertaintyMethod),
}

/// Parameter-uncertainty methods.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum UncertaintyMethod {
    /// No parameter uncertainty.
    None,
    /// Drift drawn per scenario from its estimation distribution.
    Drift,
    /// Semi-parametric Poisson bootstrap of the deaths (refit per scenario).
    Bootstrap,
}

impl UncertaintySetting {
    /// The method this setting selects.
    pub fn method(self) -> UncertaintyMethod {
        match self {
            UncertaintySetting::Switch(true) => UncertaintyMethod::Drift,
            UncertaintySetting::Switch(false) => UncertaintyMethod::None,
            UncertaintySetting::Method(m) => m,
        }
    }
}

/// `[projection]`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ProjectionConfig {
    /// Number of stochastic scenarios.
    #[serde(default = "default_scenarios")]
    pub scenarios: usize,
    /// Seed of every random stream.
    #[serde(default = "default_seed")]
    pub seed: u64,
    /// Years projected after the last fitted year.
    #[serde(default = "default_horizon")]
    pub horizon: usize,
    /// `false`: only the central path, as scenario 0.
    #[serde(default = "default_true")]
    pub noise: bool,
    /// Parameter uncertainty.
    #[serde(default = "default_uncertainty")]
    pub parameter_uncertainty: UncertaintySetting,
    /// Bootstrap replicates (refits) shared by the scenarios; scenario s uses replicate s mod B.
    #[serde(default = "default_bootstrap_samples")]
    pub bootstrap_samples: usize,
}

/// A mortality multiplier for a sex and an age band (the book's own level).
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct MortalityFactor {
    /// Sex the factor applies to.
    pub sex: Sex,
    /// Ages at which the rate is multiplied, inclusive `[first, last]`.
    pub ages: [i32; 2],
    /// Multiplier of the population q.
    pub factor: f64,
}

/// `[valuation]`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ValuationConfig {
    /// Valuation year (start of), after the last fitted year.
    #[serde(default)]
    pub year: Option<i32>,
    /// Payment timing.
    #[serde(default = "default_timing")]
    pub timing: Timing,
    /// Payments a year.
    #[serde(default = "default_frequency")]
    pub frequency: u32,
    /// Flat annual effective interest rate (0.03 is 3 %).
    #[serde(default)]
    pub rate: Option<f64>,
    /// Spot-rate curve CSV (`term,rate`), instead of `rate`.
    #[serde(default)]
    pub curve: Option<PathBuf>,
    /// Simulate individual deaths as well as trend.
    #[serde(default = "default_true")]
    pub idiosyncratic: bool,
    /// Extra horizons for the truncated expectations (besides `max_age`).
    #[serde(default)]
    pub horizons: Vec<usize>,
    /// The book's mortality level relative to the population, by sex and age band.
    #[serde(default)]
    pub mortality_factors: Vec<MortalityFactor>,
    /// Valuation date `YYYY-MM-DD` within the valuation year: the date the book's
    /// `birth_date` and `start_date` are read at. Quoted or a bare TOML date.
    #[serde(default, deserialize_with = "date_text")]
    pub date: Option<String>,
    /// How ages are read from dates of birth: `last-birthday` (default) or `nearest`.
    #[serde(default)]
    pub age_basis: AgeBasis,
}

/// `[capital]`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct CapitalConfig {
    /// Confidence levels for VaR and TVaR.
    #[serde(default = "default_levels")]
    pub levels: Vec<f64>,
    /// Standard-formula decrease in mortality (0.20 is 20 %).
    #[serde(default = "default_stress")]
    pub standard_stress: f64,
    /// Compute one-year capital by re-calibration.
    #[serde(default)]
    pub one_year: bool,
    /// Scenarios for the one-year capital.
    #[serde(default = "default_one_year_scenarios")]
    pub one_year_scenarios: usize,
    /// Allocate the capital to policies and segments (`allocation.parquet`).
    #[serde(default)]
    pub allocation: bool,
    /// Annual cost-of-capital rate for a tranche's premium figures.
    #[serde(default = "default_cost_of_capital_rate")]
    pub cost_of_capital_rate: f64,
}

/// Default `capital.cost_of_capital_rate`: 6 % a year, the Solvency II risk margin's rate
/// (Delegated Regulation (EU) 2015/35, Art. 39; from memory).
pub const DEFAULT_COST_OF_CAPITAL_RATE: f64 = 0.06;

fn default_cost_of_capital_rate() -> f64 {
    DEFAULT_COST_OF_CAPITAL_RATE
}

/// Parquet compression codec.
#[derive(Debug, Clone, Copy, Deserialize, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum Compression {
    /// Zstandard (default: best size for little time).
    Zstd,
    /// Snappy (fastest).
    Snappy,
    /// None.
    None,
}

/// `[output]`.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct OutputConfig {
    /// Output folder.
    #[serde(default = "default_folder")]
    pub folder: PathBuf,
    /// Which scenarios `paths.parquet` holds: `true`, `false` or a number N.
    #[serde(default)]
    pub paths: PathsOutput,
    /// Parquet compression.
    #[serde(default = "default_compression")]
    pub compression: Compression,
}

fn default_sexes() -> Vec<Sex> {
    Sex::ALL.to_vec()
}
fn default_kind() -> KindList {
    KindList::One(ModelKind::LeeCarter)
}
fn default_closure() -> ClosureKind {
    ClosureKind::Kannisto
}
/// Marks `closure_fit_ages` as unset; [`Config::parse`] replaces it by the default.
const CLOSURE_FIT_AGES_UNSET: usize = usize::MAX;
/// Default number of top ages the closure is fitted to (fewer if fewer ages are fitted).
const DEFAULT_CLOSURE_FIT_AGES: usize = 10;
fn default_closure_fit_ages() -> usize {
    CLOSURE_FIT_AGES_UNSET
}
fn default_max_age() -> i32 {
    120
}
fn default_tolerance() -> f64 {
    1e-8
}
fn default_max_iterations() -> usize {
    1000
}
fn default_cohort_loading() -> CohortLoading {
    CohortLoading::Free
}
fn default_min_cohort_cells() -> usize {
    3
}
fn default_cohort_series() -> CohortSeriesKind {
    CohortSeriesKind::Arima110Drift
}
fn default_scenarios() -> usize {
    1000
}
fn default_seed() -> u64 {
    1
}
fn default_horizon() -> usize {
    80
}
/// A date key as text: TOML writes dates bare (`date = 2025-06-30`) as readily as quoted,
/// and both mean the same day; the text is checked where it is read.
fn date_text<'de, D: serde::Deserializer<'de>>(
    deserializer: D,
) -> std::result::Result<Option<String>, D::Error> {
    #[derive(Deserialize)]
    #[serde(untagged)]
    enum Given {
        Text(String),
        Date(toml::value::Datetime),
    }
    Ok(
        Option::<Given>::deserialize(deserializer)?.map(|given| match given {
            Given::Text(text) => text,
            Given::Date(date) => date.to_string(),
        }),
    )
}

fn default_true() -> bool {
    true
}
fn default_uncertainty() -> UncertaintySetting {
    UncertaintySetting::Switch(false)
}
fn default_bootstrap_samples() -> usize {
    200
}
fn default_timing() -> Timing {
    Timing::Advance
}
fn default_frequency() -> u32 {
    1
}
fn default_levels() -> Vec<f64> {
    vec![0.995]
}
fn default_stress() -> f64 {
    0.20
}
fn default_one_year_scenarios() -> usize {
    1000
}
fn default_folder() -> PathBuf {
    PathBuf::from("out")
}
fn default_compression() -> Compression {
    Compression::Zstd
}

impl Default for ModelConfig {
    fn default() -> Self {
        ModelConfig {
            kind: default_kind(),
            fit: None,
            refit_kt: false,
            closure: default_closure(),
            closure_fit_ages: CLOSURE_FIT_AGES_UNSET,
            max_age: default_max_age(),
            tolerance: default_tolerance(),
            max_iterations: default_max_iterations(),
            cohort_loading: default_cohort_loading(),
            min_cohort_cells: default_min_cohort_cells(),
            cohort_series: default_cohort_series(),
            weights: None,
        }
    }
}

impl Default for ProjectionConfig {
    fn default() -> Self {
        ProjectionConfig {
            scenarios: default_scenarios(),
            seed: default_seed(),
            horizon: default_horizon(),
            noise: true,
            parameter_uncertainty: default_uncertainty(),
            bootstrap_samples: default_bootstrap_samples(),
        }
    }
}

impl Default for ValuationConfig {
    fn default() -> Self {
        ValuationConfig {
            year: None,
            timing: default_timing(),
            frequency: default_frequency(),
            rate: None,
            curve: None,
            idiosyncratic: true,
            horizons: Vec::new(),
            mortality_factors: Vec::new(),
            date: None,
            age_basis: AgeBasis::default(),
        }
    }
}

impl Default for CapitalConfig {
    fn default() -> Self {
        CapitalConfig {
            levels: default_levels(),
            standard_stress: default_stress(),
            one_year: false,
            one_year_scenarios: default_one_year_scenarios(),
            allocation: false,
            cost_of_capital_rate: default_cost_of_capital_rate(),
        }
    }
}

impl Default for OutputConfig {
    fn default() -> Self {
        OutputConfig {
            folder: default_folder(),
            paths: PathsOutput::All,
            compression: default_compression(),
        }
    }
}

/// Checks `model.weights` against the number of kinds listed: one non-negative finite
/// weight per kind, with a positive sum.
fn check_model_weights(weights: &[f64], kinds: usize) -> std::result::Result<(), String> {
    if weights.len() != kinds {
        return Err(format!(
            "gives {} weights for {kinds} model kinds in `model.kind`: one per kind, in order",
            weights.len()
        ));
    }
    if let Some((i, w)) = weights
        .iter()
        .enumerate()
        .find(|(_, w)| !(w.is_finite() && **w >= 0.0))
    {
        return Err(format!(
            "weight {} is {w}: weights must be finite and non-negative",
            i + 1
        ));
    }
    if weights.iter().sum::<f64>() <= 0.0 {
        return Err("weights must have a positive sum".to_string());
    }
    Ok(())
}

impl ModelConfig {
    /// The kinds listed, in order (the first gives the summary's top-level figures).
    pub fn kinds(&self) -> Vec<ModelKind> {
        match &self.kind {
            KindList::One(k) => vec![*k],
            KindList::Many(ks) => ks.clone(),
        }
    }

    /// The fit method for `kind`: the configured one for Lee–Carter (default Poisson),
    /// Poisson for the other log-rate models, binomial for the CBD family.
    pub fn method_for(&self, kind: ModelKind) -> FitMethod {
        match kind {
            ModelKind::LeeCarter => match self.fit {
                Some(FitMethod::Svd) => FitMethod::Svd,
                _ => FitMethod::Poisson,
            },
            ModelKind::Apc | ModelKind::RenshawHaberman => FitMethod::Poisson,
            ModelKind::Cbd | ModelKind::M6 | ModelKind::M7 => FitMethod::Binomial,
        }
    }
}

impl Config {
    /// Reads, parses and checks the config at `path`.
    pub fn load(path: &Path) -> Result<Config> {
        let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
        let text = String::from_utf8(bytes).map_err(|e| {
            let good = &e.as_bytes()[..e.utf8_error().valid_up_to()];
            let line = good.iter().filter(|&&b| b == b'\n').count() + 1;
            Error::File {
                file: path.to_path_buf(),
                rule: format!(
                    "not valid UTF-8: line {line} has a byte that is not part of a UTF-8 character; save the file as UTF-8"
                ),
            }
        })?;
        Config::parse(&text, path)
    }

    /// Parses and checks config text; `path` is used for messages and relative paths.
    pub fn parse(text: &str, path: &Path) -> Result<Config> {
        let de = toml::Deserializer::parse(text).map_err(|e| Error::File {
            file: path.to_path_buf(),
            rule: format!("not valid TOML: {}", e.to_string().trim()),
        })?;
        let mut config: Config = serde_path_to_error::deserialize(de).map_err(|e| {
            let key = e.path().to_string();
            let inner = e.into_inner();
            let message = crate::data::suggest::serde_hint(inner.message().trim());
            let key = if key == "." || key.is_empty() {
                "(top level)".to_string()
            } else {
                key
            };
            Error::config(path, key, message)
        })?;
        config.file = path.to_path_buf();
        if config.model.closure_fit_ages == CLOSURE_FIT_AGES_UNSET {
            // In i64: the ages are not checked yet, and their difference may not fit an i32.
            let n_ages = i64::from(config.data.ages[1]) - i64::from(config.data.ages[0]) + 1;
            config.model.closure_fit_ages =
                n_ages.clamp(2, DEFAULT_CLOSURE_FIT_AGES as i64) as usize;
        }
        config.base = path
            .parent()
            .map(Path::to_path_buf)
            .unwrap_or_else(|| PathBuf::from("."));
        config.check()?;
        Ok(config)
    }

    /// A path from the config resolved against the config's folder.
    pub fn resolve(&self, relative: &Path) -> PathBuf {
        if relative.is_absolute() {
            relative.to_path_buf()
        } else {
            self.base.join(relative)
        }
    }

    /// The fitted ages.
    pub fn ages(&self) -> Span {
        Span {
            first: self.data.ages[0],
            last: self.data.ages[1],
        }
    }

    /// The fitted years.
    pub fn years(&self) -> Span {
        Span {
            first: self.data.years[0],
            last: self.data.years[1],
        }
    }

    /// The valuation year: configured, or the year after the last fitted year.
    pub fn valuation_year(&self) -> i32 {
        self.valuation.year.unwrap_or(self.data.years[1] + 1)
    }

    /// The valuation date (`valuation.date`), if given; checked by [`Config::parse`] to
    /// be a date within the valuation year.
    pub fn valuation_date(&self) -> Option<chrono::NaiveDate> {
        self.valuation
            .date
            .as_deref()
            .and_then(|text| crate::data::dates::parse_date(text).ok())
    }

    /// The experience inputs with their roles (`experience`, or `deaths` and
    /// `exposures`), resolved against the config's folder; a spreadsheet's `#sheet` is kept.
    pub fn experience_inputs(&self) -> Vec<(&'static str, PathBuf)> {
        let d = &self.data;
        [
            ("experience", &d.experience),
            ("deaths", &d.deaths),
            ("exposures", &d.exposures),
        ]
        .into_iter()
        .filter_map(|(role, path)| path.as_ref().map(|p| (role, self.resolve(p))))
        .collect()
    }

    /// The output folder resolved against the config's folder.
    pub fn output_folder(&self) -> PathBuf {
        self.resolve(&self.output.folder)
    }

    fn err(&self, key: &str, rule: impl Into<String>) -> Error {
        Error::config(&self.file, key, rule)
    }

    /// Checks `[basis]` against the inputs it needs.
    fn check_basis(&self, basis: &BasisConfig) -> Result<()> {
        if self.data.book_experience.is_none() {
            return Err(self.err(
                "data.book_experience",
                "`[basis]` needs the book's own deaths and exposures: set `data.book_experience`",
            ));
        }
        if basis.kind == BasisKind::LiLee && basis.level_uncertainty {
            return Err(self.err(
                "basis.level_uncertainty",
                "is not available with `kind = \"li-lee\"`: the book is then a second large \
                 population whose level is estimated from its own rates, and this kind does not \
                 model the level's mis-estimation; set it to false (or use `kind = \"relative\"` \
                 for a small book)",
            ));
        }
        Ok(())
    }

    /// Checks every rule that serde's types cannot express.
    fn check(&self) -> Result<()> {
        let d = &self.data;
        if d.ages[0] < 0 || d.ages[1] < d.ages[0] || d.ages[1] > 130 {
            return Err(self.err(
                "data.ages",
                format!(
                    "must be [first, last] with 0 <= first <= last <= 130, found {:?}",
                    d.ages
                ),
            ));
        }
        if d.ages[1] - d.ages[0] < 1 {
            return Err(self.err("data.ages", "needs at least two ages to fit a model"));
        }
        if d.years[1] < d.years[0] || d.years[0] < 1700 || d.years[1] > 2300 {
            return Err(self.err(
                "data.years",
                format!(
                    "must be [first, last] with 1700 <= first <= last <= 2300, found {:?}",
                    d.years
                ),
            ));
        }
        if d.years[1] - d.years[0] < 2 {
            return Err(self.err(
                "data.years",
                "needs at least three years to estimate a random walk",
            ));
        }
        match (&d.experience, &d.deaths, &d.exposures) {
            (Some(_), None, None) | (None, Some(_), Some(_)) => {}
            (Some(_), _, _) => {
                return Err(self.err(
                    "data.experience",
                    "give `experience` or the published `deaths` and `exposures`, not both",
                ));
            }
            (None, Some(_), None) => {
                return Err(self.err(
                    "data.exposures",
                    "`data.deaths` needs `data.exposures`, the matching published exposures table",
                ));
            }
            (None, None, Some(_)) => {
                return Err(self.err(
                    "data.deaths",
                    "`data.exposures` needs `data.deaths`, the matching published deaths table",
                ));
            }
            (None, None, None) => {
                return Err(self.err(
                    "data.experience",
                    "missing: name the experience (`year,age,sex,deaths,exposure`, CSV or spreadsheet) with `data.experience`, or published tables with `data.deaths` and `data.exposures`",
                ));
            }
        }
        if d.sexes.is_empty() {
            return Err(self.err("data.sexes", "must list at least one of \"F\", \"M\""));
        }
        let mut sexes = d.sexes.clone();
        sexes.sort();
        sexes.dedup();
        if sexes.len() != d.sexes.len() {
            return Err(self.err("data.sexes", "lists a sex twice"));
        }

        let m = &self.model;
        let kinds = m.kinds();
        if kinds.is_empty() {
            return Err(self.err("model.kind", "must name at least one model"));
        }
        if let Some((i, kind)) = kinds
            .iter()
            .enumerate()
            .find(|(i, k)| kinds[..*i].contains(k))
        {
            return Err(self.err(
                "model.kind",
                format!("lists `{}` twice (entry {})", kind.name(), i + 1),
            ));
        }
        if let Some(weights) = &m.weights {
            check_model_weights(weights, kinds.len())
                .map_err(|rule| self.err("model.weights", rule))?;
        }
        if m.fit == Some(FitMethod::Binomial) && kinds.contains(&ModelKind::LeeCarter) {
            return Err(self.err(
                "model.fit",
                "`binomial` is the CBD fit; Lee–Carter takes `svd` or `poisson`",
            ));
        }
        if m.max_age <= d.ages[1] || m.max_age > 130 {
            return Err(self.err(
                "model.max_age",
                format!(
                    "must be above the top fitted age {} and at most 130, found {}",
                    d.ages[1], m.max_age
                ),
            ));
        }
        let n_ages = (d.ages[1] - d.ages[0] + 1) as usize;
        if m.closure_fit_ages < 2 || m.closure_fit_ages > n_ages {
            return Err(self.err(
                "model.closure_fit_ages",
                format!(
                    "must be between 2 and the number of fitted ages ({n_ages}), found {}",
                    m.closure_fit_ages
                ),
            ));
        }
        if !(m.tolerance.is_finite() && m.tolerance > 0.0) {
            return Err(self.err("model.tolerance", "must be a positive number"));
        }
        if m.max_iterations == 0 {
            return Err(self.err("model.max_iterations", "must be at least 1"));
        }
        // Whether enough cohorts reach this many cells depends on the window and is the
        // model's check; here only the value itself is judged.
        if m.min_cohort_cells == 0 || m.min_cohort_cells > 200 {
            return Err(self.err(
                "model.min_cohort_cells",
                format!(
                    "must be between 1 and 200 cells, found {}",
                    m.min_cohort_cells
                ),
            ));
        }

        let p = &self.projection;
        if p.scenarios == 0 {
            return Err(self.err("projection.scenarios", "must be at least 1"));
        }
        if p.bootstrap_samples == 0 {
            return Err(self.err("projection.bootstrap_samples", "must be at least 1"));
        }
        if p.horizon == 0 || p.horizon > 200 {
            return Err(self.err(
                "projection.horizon",
                format!("must be between 1 and 200 years, found {}", p.horizon),
            ));
        }

        let v = &self.valuation;
        if let Some(year) = v.year {
            if year <= d.years[1] {
                return Err(self.err(
                    "valuation.year",
                    format!(
                        "must be after the last fitted year {}, found {year}",
                        d.years[1]
                    ),
                ));
            }
            if year > d.years[1] + p.horizon as i32 {
                return Err(self.err(
                    "valuation.year",
                    format!(
                        "must lie within the projection (up to {}), found {year}",
                        d.years[1] + p.horizon as i32
                    ),
                ));
            }
        }
        if ![1, 2, 4, 12].contains(&v.frequency) && !(1..=365).contains(&v.frequency) {
            return Err(self.err("valuation.frequency", "must be between 1 and 365"));
        }
        match (v.rate, &v.curve) {
            (Some(_), Some(_)) => {
                return Err(self.err("valuation.rate", "give either `rate` or `curve`, not both"));
            }
            (Some(r), None) => {
                if !r.is_finite() || r <= -1.0 {
                    return Err(self.err("valuation.rate", "must be a number above -1"));
                }
                if r.abs() > 0.25 {
                    return Err(self.err(
                        "valuation.rate",
                        format!(
                            "{r} is an annual rate of {:.0} %; write rates as decimals (0.03 for 3 %)",
                            r * 100.0
                        ),
                    ));
                }
            }
            _ => {}
        }
        if let Some(text) = &v.date {
            let date = crate::data::dates::parse_date(text)
                .map_err(|rule| self.err("valuation.date", rule))?;
            let year = self.valuation_year();
            if chrono::Datelike::year(&date) != year {
                return Err(self.err(
                    "valuation.date",
                    format!("{text} is not in the valuation year {year} (`valuation.year`)"),
                ));
            }
        }
        if v.horizons.contains(&0) {
            return Err(self.err("valuation.horizons", "horizons must be at least 1 year"));
        }
        for (i, f) in v.mortality_factors.iter().enumerate() {
            let key = format!("valuation.mortality_factors[{i}]");
            if !(f.factor.is_finite() && f.factor > 0.0 && f.factor <= 10.0) {
                return Err(self.err(&format!("{key}.factor"), "must be in (0, 10]"));
            }
            if f.ages[1] < f.ages[0] || f.ages[0] < 0 || f.ages[1] > 130 {
                return Err(self.err(
                    &format!("{key}.ages"),
                    format!(
                        "must be [first, last] with 0 <= first <= last <= 130, found {:?}",
                        f.ages
                    ),
                ));
            }
        }

        let c = &self.capital;
        for level in &c.levels {
            if !(*level > 0.0 && *level < 1.0) {
                return Err(self.err(
                    "capital.levels",
                    format!("levels are probabilities in (0, 1) such as 0.995, found {level}"),
                ));
            }
        }
        if !(c.standard_stress >= 0.0 && c.standard_stress < 1.0) {
            return Err(self.err(
                "capital.standard_stress",
                format!(
                    "must be a fraction in [0, 1) such as 0.20 for 20 %, found {}",
                    c.standard_stress
                ),
            ));
        }
        if c.one_year && c.one_year_scenarios == 0 {
            return Err(self.err("capital.one_year_scenarios", "must be at least 1"));
        }
        self.check_allocation()?;
        if let Some(basis) = &self.basis {
            self.check_basis(basis)?;
        }
        if let Some(hedge) = &self.hedge {
            hedge.check(self)?;
            if !p.noise {
                return Err(self.err("projection.noise", HEDGES_NEED_NOISE));
            }
        }
        Ok(())
    }
}

impl Config {
    /// Checks the allocation keys: a tranche needs the allocation, and the allocation needs
    /// stochastic scenarios and a book.
    fn check_allocation(&self) -> Result<()> {
        let c = &self.capital;
        if !(c.cost_of_capital_rate.is_finite() && (0.0..1.0).contains(&c.cost_of_capital_rate)) {
            return Err(self.err(
                "capital.cost_of_capital_rate",
                format!(
                    "must be a fraction in [0, 1) such as 0.06 for 6 %, found {}",
                    c.cost_of_capital_rate
                ),
            ));
        }
        if self.data.candidate_book.is_some() && !c.allocation {
            return Err(self.err(
                "data.candidate_book",
                "a candidate tranche's marginal capital comes with the allocation: set `capital.allocation = true`",
            ));
        }
        if c.allocation {
            if self.data.book.is_none() {
                return Err(self.err(
                    "capital.allocation",
                    "allocation needs a book: set `data.book`",
                ));
            }
            if !self.projection.noise || self.projection.scenarios < 2 {
                return Err(self.err(
                    "capital.allocation",
                    "allocation needs stochastic scenarios: set `projection.noise = true` and at least 2 `projection.scenarios`",
                ));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MINIMAL: &str = r#"
[data]
experience = "e.csv"
ages = [55, 100]
years = [1975, 2024]
"#;

    #[test]
    fn minimal_config_takes_defaults() {
        let c = Config::parse(MINIMAL, Path::new("dir/c.toml")).unwrap();
        assert_eq!(c.model.kinds(), vec![ModelKind::LeeCarter]);
        assert_eq!(c.valuation_year(), 2025);
        assert_eq!(c.resolve(Path::new("e.csv")), PathBuf::from("dir/e.csv"));
    }

    #[test]
    fn closure_default_fits_a_short_window() {
        let text = MINIMAL.replace("[55, 100]", "[55, 60]");
        let c = Config::parse(&text, Path::new("c.toml")).unwrap();
        assert_eq!(c.model.closure_fit_ages, 6);
        let c = Config::parse(MINIMAL, Path::new("c.toml")).unwrap();
        assert_eq!(c.model.closure_fit_ages, 10);
    }

    #[test]
    fn valuation_date_is_read_quoted_or_bare() {
        for given in ["\"2025-06-30\"", "2025-06-30"] {
            let text = format!("{MINIMAL}\n[valuation]\nyear = 2025\ndate = {given}\n");
            let c = Config::parse(&text, Path::new("c.toml")).unwrap();
            assert_eq!(c.valuation.date.as_deref(), Some("2025-06-30"), "{given}");
        }
        let text = format!("{MINIMAL}\n[valuation]\nyear = 2025\ndate = 20250630\n");
        let err = Config::parse(&text, Path::new("c.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("valuation.date"), "{err}");
    }

    #[test]
    fn unknown_key_is_named() {
        let text = format!("{MINIMAL}\n[projection]\nscenarioz = 3\n");
        let err = Config::parse(&text, Path::new("c.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("scenarioz"), "{err}");
        assert!(err.contains("projection"), "{err}");
    }

    #[test]
    fn cohort_kinds_and_settings_parse() {
        let text = format!(
            "{MINIMAL}\n[model]\nkind = [\"apc\", \"renshaw-haberman\", \"m6\", \"m7\"]\n\
             cohort_loading = \"unit\"\nmin_cohort_cells = 5\ncohort_series = \"ar1-trend\"\n"
        );
        let c = Config::parse(&text, Path::new("c.toml")).unwrap();
        assert_eq!(
            c.model.kinds(),
            vec![
                ModelKind::Apc,
                ModelKind::RenshawHaberman,
                ModelKind::M6,
                ModelKind::M7
            ]
        );
        assert_eq!(c.model.cohort_loading, CohortLoading::Unit);
        assert_eq!(c.model.min_cohort_cells, 5);
        assert_eq!(c.model.cohort_series, CohortSeriesKind::Ar1Trend);
        assert_eq!(c.model.method_for(ModelKind::M7), FitMethod::Binomial);
        let defaults = Config::parse(MINIMAL, Path::new("c.toml")).unwrap().model;
        assert_eq!(defaults.min_cohort_cells, 3);
        assert_eq!(defaults.cohort_loading, CohortLoading::Free);
    }

    #[test]
    fn model_weights_are_checked_against_the_kinds() {
        let parse = |model: &str| {
            Config::parse(
                &format!("{MINIMAL}\n[model]\n{model}\n"),
                Path::new("c.toml"),
            )
        };
        let ok = parse("kind = [\"lee-carter\", \"cbd\"]\nweights = [1, 3]").unwrap();
        assert_eq!(ok.model.weights, Some(vec![1.0, 3.0]));
        for (model, piece) in [
            (
                "kind = [\"lee-carter\", \"cbd\"]\nweights = [1]",
                "gives 1 weights for 2",
            ),
            (
                "kind = [\"lee-carter\", \"cbd\"]\nweights = [1, -1]",
                "weight 2 is -1",
            ),
            (
                "kind = [\"lee-carter\", \"cbd\"]\nweights = [0, 0]",
                "positive sum",
            ),
        ] {
            let err = parse(model).unwrap_err().to_string();
            assert!(
                err.contains("model.weights") && err.contains(piece),
                "{err}"
            );
        }
        let err = parse("kind = [\"cbd\", \"lee-carter\", \"cbd\"]")
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("model.kind") && err.contains("`cbd` twice"),
            "{err}"
        );
    }

    #[test]
    fn min_cohort_cells_of_zero_is_rejected() {
        let text = format!("{MINIMAL}\n[model]\nmin_cohort_cells = 0\n");
        let err = Config::parse(&text, Path::new("c.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("model.min_cohort_cells"), "{err}");
        let text = format!("{MINIMAL}\n[model]\ncohort_loading = \"half\"\n");
        let err = Config::parse(&text, Path::new("c.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("cohort_loading"), "{err}");
    }

    #[test]
    fn percent_rate_is_rejected_with_hint() {
        let text = format!("{MINIMAL}\n[valuation]\nrate = 3\n");
        let err = Config::parse(&text, Path::new("c.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("valuation.rate"), "{err}");
    }
}
