//! The config file as written: one serde struct per section, each rejecting unknown keys, with the
//! defaults written once in their `Default` impls. Nothing here checks a range or resolves a path; that
//! is [`super::resolve`]'s work, and only the resolved [`super::Config`] leaves the config module.

use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::PathBuf;

/// The config file as written. Every struct rejects unknown keys.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawConfig {
    pub fund: RawFund,
    pub data: RawData,
    pub quality: QualityOptions,
    pub scenarios: ScenarioOptions,
    pub risk: RawRisk,
    pub limits: RawLimits,
    /// The policy portfolio: targets, ranges and the benchmark series of each line.
    pub policy: Option<RawPolicy>,
    pub models: RawModels,
    pub costs: RawCosts,
    /// Currency hedging and interest rate differentials.
    pub currency: RawCurrency,
    pub solver: SolverOptions,
    pub output: RawOutput,
    pub analysis: AnalysisOptions,
    pub stress: RawStress,
    pub report: RawReport,
    pub signoff: RawSignoff,
    /// The liabilities the assets back (a pension plan's or an insurer's): present value, proxy series and
    /// rate sensitivity; none by default (an asset-only fund).
    pub liabilities: Option<RawLiabilities>,
    /// Several funds (mandates) in one config: each entry overrides `fund` and, where given, the holdings,
    /// limits, models, policy, cost rates and sign-off of the shared settings; prices and asset metadata
    /// are shared.
    pub funds: Vec<RawMandate>,
}

/// One fund of a multi-fund config.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawMandate {
    pub fund: RawFund,
    pub holdings: Option<PathBuf>,
    pub limits: Option<RawLimits>,
    pub models: Option<RawModels>,
    pub policy: Option<RawPolicy>,
    pub costs: Option<RawCosts>,
    pub signoff: Option<RawSignoff>,
}

/// Sign-off roles: who must sign a pack before it can be finalised, with the public keys trusted per role.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawSignoff {
    pub roles: Vec<SignRole>,
}

/// One required role with its printed title and trusted Ed25519 public keys (64 hex digits each).
#[derive(Debug, Deserialize, Default, Clone, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct SignRole {
    pub role: String,
    pub title: Option<String>,
    pub keys: Vec<String>,
}

/// Frontier and walk-forward backtest settings.
#[derive(Debug, Deserialize, Clone, serde::Serialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields, default)]
pub struct AnalysisOptions {
    /// Points on the efficient frontier, from the min-CVaR to the max-return portfolio.
    pub frontier_points: usize,
    /// Years of month-ends before as-of at which the walk-forward backtest rebalances (0 turns it off).
    pub backtest_years: u32,
    /// Also backtest a daily 99% VaR over the last 250 observations (Basel traffic light).
    pub daily_var_check: bool,
    /// Stationary-bootstrap resamples of the scenario window behind the estimation-error bands (0 turns
    /// the bands off).
    pub band_resamples: usize,
    /// Mean block length of the stationary bootstrap, in observations (default: the scenario horizon).
    pub band_block: Option<f64>,
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        AnalysisOptions {
            frontier_points: 21,
            backtest_years: 5,
            daily_var_check: true,
            band_resamples: 200,
            band_block: None,
        }
    }
}

/// The stress set: a file of named shocks, a loss limit and the number of historical windows replayed.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawStress {
    /// YAML file of named shocks, relative to the config file.
    pub file: Option<PathBuf>,
    /// A stress loss above this fraction of portfolio value is flagged as a breach.
    pub loss_limit: Option<f64>,
    /// Worst non-overlapping horizon windows of the full history replayed on each portfolio.
    pub historical_windows: usize,
}

impl Default for RawStress {
    fn default() -> Self {
        RawStress {
            file: None,
            loss_limit: None,
            historical_windows: 3,
        }
    }
}

/// Who the pack is for.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawFund {
    pub name: String,
    /// Folder-safe short name; derived from `name` when empty.
    pub short_name: Option<String>,
    pub prepared_for: Option<String>,
    pub prepared_by: Option<String>,
    /// The fund's value in its base currency; money figures (trades, costs) need it.
    pub value: Option<f64>,
    /// The base currency's ISO 4217 code (three upper-case letters); given together with `value`.
    pub base_currency: Option<String>,
}

/// Where the input files are.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawData {
    pub prices: Option<PathBuf>,
    pub layout: Layout,
    pub assets: Option<PathBuf>,
    pub holdings: Option<PathBuf>,
    /// Exchange rates: per date, the value of one unit of each currency in the base currency (wide or
    /// long, as the price file).
    pub fx: Option<PathBuf>,
    /// Price-file columns this fund leaves out: not read into the run, not checked, not archived apart
    /// (the price file is archived whole). Each must be a column of the price file.
    pub skip_columns: Vec<String>,
    /// A scenario file (CSV or Parquet: `scenario,[probability,]<asset>…`, one joint scenario of returns
    /// over the horizon per row) used instead of scenarios cut from the price history.
    pub scenarios: Option<PathBuf>,
}

/// Currency hedging: hedge ratios (0 to 1; an asset's own beats a tag's, a tag's beats its class's; 0
/// without any) and per-currency annual interest rate differentials (default 0).
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawCurrency {
    pub hedge: RawHedge,
    /// Annual interest rate differential per currency code, base-currency rate minus the currency's, as
    /// a fraction (0.01 = 1% a year).
    pub rate_differential: BTreeMap<String, f64>,
}

/// Hedge ratios by asset class, `column:value` tag and asset code.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawHedge {
    pub class: BTreeMap<String, f64>,
    pub tag: BTreeMap<String, f64>,
    pub asset: BTreeMap<String, f64>,
}

/// Shape of the price file.
#[derive(
    Debug, Deserialize, Default, Clone, Copy, PartialEq, Eq, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "snake_case")]
pub enum Layout {
    /// Detect: `date, asset, price` columns mean long, anything else with a `date` column means wide.
    #[default]
    Auto,
    /// One row per (date, asset): columns `date`, `asset`, `price`.
    Long,
    /// One row per date: `date` then one column per asset.
    Wide,
}

impl Layout {
    /// The word used in config files and messages.
    pub fn word(self) -> &'static str {
        match self {
            Layout::Auto => "auto",
            Layout::Long => "long",
            Layout::Wide => "wide",
        }
    }
}

/// Data-quality thresholds and the fill policy.
#[derive(Debug, Deserialize, Clone, serde::Serialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields, default)]
pub struct QualityOptions {
    /// Forward-fill a missing price from the last observation for at most this many consecutive
    /// observations; a longer gap drops the asset with a warning.
    pub max_fill: usize,
    /// This many or more consecutive identical prices are flagged as a stale run.
    pub stale_run: usize,
    /// A single-period simple return larger than this in absolute value is flagged.
    pub extreme_move: f64,
    /// Rule of thumb (common practice, not a theorem): at least this many observations per asset.
    pub min_obs_per_asset: usize,
    /// An asset without a smoothing treatment whose returns have a first-order autocorrelation at or
    /// above this (and more than two standard errors above zero) is flagged as appraisal-like.
    pub autocorrelation_flag: f64,
}

impl Default for QualityOptions {
    fn default() -> Self {
        QualityOptions {
            max_fill: 3,
            stale_run: 10,
            extreme_move: 0.25,
            min_obs_per_asset: 10,
            autocorrelation_flag: 0.3,
        }
    }
}

/// How scenarios are cut from the price history.
#[derive(Debug, Deserialize, Clone, serde::Serialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields, default)]
pub struct ScenarioOptions {
    /// Horizon h in observations (21 business days ≈ one month).
    pub horizon: usize,
    /// Distance between the starts of consecutive windows.
    pub step: usize,
    /// Years of history before as-of used for scenarios.
    pub lookback_years: u32,
    /// Half-life of exponentially decaying probabilities, in observations; absent means equal.
    pub half_life: Option<f64>,
    /// The observations scenarios are built on: every price date (`daily`), or the last observation of
    /// each calendar month or quarter (`monthly`, `quarterly`); `horizon` and `step` count these.
    pub frequency: Frequency,
    /// Geltner's ρ given per asset code for assets whose metadata asks for unsmoothing (`smoothing:
    /// geltner`); an asset not listed has its ρ estimated over the look-back.
    pub geltner_rho: BTreeMap<String, f64>,
}

/// The largest Geltner ρ tailpack unsmooths with, given or estimated: unsmoothing divides by 1 − ρ, so
/// at ρ = 0.9 an observed return counts ten times. A limit of our own (a sanity rule, not a published
/// standard): beyond it the rebuilt series is driven by the estimate's noise rather than by the data.
pub const MAX_GELTNER_RHO: f64 = 0.9;

/// How often a series is observed: the scenario frequency (`scenarios.frequency`) and an asset's
/// valuation frequency (the asset metadata's `valuation` column), from most to least frequent.
#[derive(
    Debug,
    Deserialize,
    Clone,
    Copy,
    PartialEq,
    Eq,
    PartialOrd,
    Ord,
    Default,
    serde::Serialize,
    schemars::JsonSchema,
)]
#[serde(rename_all = "lowercase")]
pub enum Frequency {
    #[default]
    Daily,
    Monthly,
    Quarterly,
}

impl Frequency {
    /// The word used in config files, metadata and messages.
    pub fn word(self) -> &'static str {
        match self {
            Frequency::Daily => "daily",
            Frequency::Monthly => "monthly",
            Frequency::Quarterly => "quarterly",
        }
    }

    /// The period one observation stands for, as printed ("day", "month", "quarter").
    pub fn period(self) -> &'static str {
        match self {
            Frequency::Daily => "observation",
            Frequency::Monthly => "month",
            Frequency::Quarterly => "quarter",
        }
    }

    /// A span of `n` observations in words: "21 observations" (daily), "1 month", "2 quarters".
    pub fn span(self, n: usize) -> String {
        let s = if n == 1 { "" } else { "s" };
        match self {
            Frequency::Daily => format!("{n} observations"),
            other => format!("{n} {}{s}", other.period()),
        }
    }

    /// Reads a metadata cell (`daily`, `monthly`, `quarterly`, any case).
    pub fn parse(text: &str) -> Option<Frequency> {
        match text.to_ascii_lowercase().as_str() {
            "daily" => Some(Frequency::Daily),
            "monthly" => Some(Frequency::Monthly),
            "quarterly" => Some(Frequency::Quarterly),
            _ => None,
        }
    }
}

impl Default for ScenarioOptions {
    fn default() -> Self {
        ScenarioOptions {
            horizon: 21,
            step: 1,
            lookback_years: 5,
            half_life: None,
            frequency: Frequency::Daily,
            geltner_rho: BTreeMap::new(),
        }
    }
}

/// Confidence levels.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawRisk {
    /// Levels reported for every portfolio.
    pub levels: Vec<f64>,
    /// The level the models constrain or minimise.
    pub confidence: f64,
    /// What the models' CVaR measures: the assets' loss (default) or the surplus's (needs `liabilities`).
    pub basis: Basis,
}

/// The loss the models work on (`risk.basis`).
#[derive(Debug, Deserialize, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Basis {
    /// The loss of the assets, −r_k·x.
    #[default]
    Assets,
    /// The loss of the surplus (assets minus liabilities) as a fraction of the assets, ℓ_k/F − r_k·x.
    Surplus,
}

impl Basis {
    /// The name in the config and in results.json.
    pub fn name(self) -> &'static str {
        match self {
            Basis::Assets => "assets",
            Basis::Surplus => "surplus",
        }
    }
}

/// The liabilities (`liabilities`): what the fund owes, valued at the as-of date, and the series whose
/// returns track that value.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawLiabilities {
    /// Present value at the as-of date, in the base currency (`fund.base_currency`).
    pub value: Option<f64>,
    /// The price-file column without an asset metadata row whose returns track the liabilities' value.
    pub proxy: Option<String>,
    /// Modified duration of the liabilities, in years.
    pub duration: Option<f64>,
    /// Convexity of the liabilities, in years squared.
    pub convexity: Option<f64>,
    /// The proxy's tags, as if it had an asset metadata row (column → value), so that a stress move by
    /// tag can move the liabilities.
    pub tags: BTreeMap<String, String>,
}

impl Default for RawRisk {
    fn default() -> Self {
        RawRisk {
            levels: vec![0.95, 0.975, 0.99],
            confidence: 0.95,
            basis: Basis::Assets,
        }
    }
}

/// The feasible set shared by all models.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawLimits {
    /// Lower weight bound for assets whose metadata gives none.
    pub default_min: f64,
    /// Upper weight bound for assets whose metadata gives none.
    pub default_max: f64,
    /// Assets that must get zero weight.
    pub exclude: Vec<String>,
    pub groups: Vec<RawGroup>,
    /// Σ|x − current| ≤ turnover_max; needs current holdings.
    pub turnover_max: Option<f64>,
}

impl Default for RawLimits {
    fn default() -> Self {
        RawLimits {
            default_min: 0.0,
            default_max: 1.0,
            exclude: vec![],
            groups: vec![],
            turnover_max: None,
        }
    }
}

/// A group limit: members chosen by a metadata tag (`class:equity`) or listed.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawGroup {
    pub name: String,
    /// `column:value` against the asset metadata, e.g. `class:equity`.
    pub tag: Option<String>,
    /// Explicit member list.
    pub assets: Option<Vec<String>>,
    pub min: Option<f64>,
    pub max: Option<f64>,
}

/// The policy portfolio: the fund's strategic targets with their permitted ranges, and per line the series
/// that measures it in the policy benchmark.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawPolicy {
    /// The models keep every portfolio inside the policy ranges (each line's min and max become a group
    /// limit).
    pub ranges_as_limits: bool,
    pub lines: Vec<RawPolicyLine>,
    /// A limit on the models' active CVaR against the policy benchmark at the model confidence, as a
    /// fraction of the fund's value; none by default.
    pub active_cvar_budget: Option<f64>,
}

impl Default for RawPolicy {
    fn default() -> Self {
        RawPolicy {
            ranges_as_limits: true,
            lines: vec![],
            active_cvar_budget: None,
        }
    }
}

/// One line of the policy: its members (an asset class, a metadata tag or a list of assets), its target
/// weight, its permitted range and the price-file series that measures it.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawPolicyLine {
    pub name: String,
    /// Members: the assets of this class (`class` column of the asset metadata).
    pub class: Option<String>,
    /// Members: `column:value` against the asset metadata, e.g. `region:north`.
    pub tag: Option<String>,
    /// Members: an explicit asset list.
    pub assets: Option<Vec<String>>,
    pub target: Option<f64>,
    pub min: Option<f64>,
    pub max: Option<f64>,
    /// A price-file column: an asset of the universe, or a series without a metadata row (not investable).
    pub benchmark: Option<String>,
}

/// Model-specific settings.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawModels {
    pub max_return: RawMaxReturn,
    pub min_cvar: RawMinCvar,
}

/// Transaction cost rates: one way (a purchase or a sale each pays it), in basis points of the amount
/// traded. An asset's own rate beats its class's; an asset named in neither trades free.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawCosts {
    /// Rate per asset class (the asset metadata's `class`), e.g. `equity: 10`.
    pub class_bps: BTreeMap<String, f64>,
    /// Rate per asset code, e.g. `EQEM-01: 25`.
    pub asset_bps: BTreeMap<String, f64>,
}

/// Highest one-way cost rate accepted, in basis points (10%): a larger figure is a unit mistake.
pub const MAX_COST_BPS: f64 = 1000.0;

/// Settings of the max-return model.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawMaxReturn {
    pub cvar_cap: RawCap,
}

impl Default for RawMaxReturn {
    fn default() -> Self {
        RawMaxReturn {
            cvar_cap: RawCap {
                value: None,
                times_current: None,
                times_min: Some(1.5),
            },
        }
    }
}

/// A CVaR cap: exactly one of the three forms.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawCap {
    /// Absolute cap on CVaR (a loss fraction, 0.05 = 5%).
    pub value: Option<f64>,
    /// Cap = this multiple of the current portfolio's CVaR.
    pub times_current: Option<f64>,
    /// Cap = this multiple of the minimum attainable CVaR over the feasible set.
    pub times_min: Option<f64>,
}

/// Settings of the min-CVaR model.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawMinCvar {
    pub return_floor: RawFloor,
}

impl Default for RawMinCvar {
    fn default() -> Self {
        RawMinCvar {
            return_floor: RawFloor {
                value: None,
                plus_current: Some(0.0),
            },
        }
    }
}

/// An expected-return floor: exactly one of the two forms.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawFloor {
    /// Absolute floor on expected horizon return.
    pub value: Option<f64>,
    /// Floor = current portfolio's expected return plus this.
    pub plus_current: Option<f64>,
}

/// Which LP backend solves the models.
#[derive(Debug, Deserialize, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Backend {
    /// HiGHS dual simplex (default).
    #[default]
    Highs,
    /// Clarabel interior point (cross-check).
    Clarabel,
}

impl std::str::FromStr for Backend {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "highs" => Ok(Backend::Highs),
            "clarabel" => Ok(Backend::Clarabel),
            other => Err(format!(
                "unknown solver backend `{other}`; expected `highs` or `clarabel`"
            )),
        }
    }
}

impl Backend {
    /// The name used in results and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Backend::Highs => "highs",
            Backend::Clarabel => "clarabel",
        }
    }
}

/// Solver settings.
#[derive(Debug, Deserialize, Clone, Default, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct SolverOptions {
    pub backend: Backend,
}

/// Output settings.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawOutput {
    /// Pack root, relative to the config file; without it, [`DEFAULT_OUT_ROOT`].
    pub root: Option<PathBuf>,
}

/// The pack root when neither `--out` nor `output.root` gives one, relative to the current folder.
pub const DEFAULT_OUT_ROOT: &str = "out";

/// Settings of the PDF pack.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawReport {
    /// Folder of custom typst templates, relative to the config file; its files replace the built-in
    /// templates of the same name, file by file.
    pub templates: Option<PathBuf>,
    /// Wall-clock seconds the typesetter may take for one PDF before it is stopped.
    pub typeset_seconds: u64,
    /// Megabytes of memory the typesetter may allocate for one PDF.
    pub typeset_memory_mb: u64,
}

impl Default for RawReport {
    fn default() -> Self {
        RawReport {
            templates: None,
            typeset_seconds: 300,
            typeset_memory_mb: 2048,
        }
    }
}

/// Allowed `report.typeset_seconds`: at least a second, at most an hour.
pub const TYPESET_SECONDS: std::ops::RangeInclusive<u64> = 1..=3600;
/// Allowed `report.typeset_memory_mb`: enough for the typesetter to start, at most 1 TiB.
pub const TYPESET_MEMORY_MB: std::ops::RangeInclusive<u64> = 256..=1_048_576;
