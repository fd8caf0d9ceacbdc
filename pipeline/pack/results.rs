//! The shape of `results.json`: one struct per object of the file, each field documented with its unit.
//! `pack::results_json` fills these from a run and serialises them; `schema` generates the shipped JSON
//! Schema from the same types, so the file and its schema cannot part. A new field of results.json is one
//! field (with its doc comment) in one struct here, filled where its block is built in `pack`.
//!
//! Units used in the descriptions: "fraction of value" is a share of the fund's (or portfolio's) value,
//! 0.05 = 5%; "per horizon" is over one scenario horizon (`scenarios.horizon` observations of
//! `scenarios.frequency`); "annualised" is per year; amounts are in the base currency.
//!
//! Objects written through `serde_json::Value` have sorted keys, so field order here does not matter.

use crate::archive::InputFile;
use crate::diag::Check;
use crate::ingest::quality::QualityReport;
use crate::ingest::valuation::AssetValuation;
use crate::models::Preconditions;
use crate::risk::Tail;
use schemars::JsonSchema;
use serde::Serialize;
use std::collections::BTreeMap;

/// Asset code → a figure, in the unit its field names.
pub type PerAsset = BTreeMap<String, f64>;

/// `results.json`: everything a run computed, the pack's machine-readable record.
#[derive(Serialize, JsonSchema)]
pub struct Results {
    /// The program that wrote the file.
    pub tool: Tool,
    /// The pack id: SHA-256 (hex) of the bytes of `inputs.sha256`.
    pub pack_id: String,
    /// The fund as the config names it.
    pub fund: Fund,
    /// The fund's value in the base currency (`fund.value`); null without one.
    pub fund_value: Option<f64>,
    /// ISO 4217 code of the base currency (`fund.base_currency`); null without one.
    pub base_currency: Option<String>,
    /// Transaction cost rates.
    pub costs: Costs,
    /// Model name → asset code → amount bought (positive) or sold (negative), in the base currency:
    /// fund value × (weight − current weight). Null without a fund value or without current holdings.
    pub trades: Option<BTreeMap<String, PerAsset>>,
    /// The as-of date (YYYY-MM-DD): the last price date used.
    pub as_of: String,
    /// The model confidence level c, a fraction (0.95 = 95%).
    pub confidence: f64,
    /// 1 − confidence: the share of probability in the tail CVaR averages over, a fraction.
    pub tail_fraction: f64,
    /// Every confidence level reported (fractions), the model confidence among them.
    pub levels: Vec<f64>,
    /// The asset codes of the universe, in the order of every per-asset list.
    pub assets: Vec<String>,
    /// Each asset's class, in asset order.
    pub classes: Vec<String>,
    /// Currencies, hedging and currency risk.
    pub currency: Currency,
    /// The feasible set the models solved over.
    pub constraints: Constraints,
    /// The max-ratio model's preconditions, from its two auxiliary LPs.
    pub preconditions: Preconditions,
    /// Model family name → its outcome.
    pub models: BTreeMap<String, Model>,
    /// Risk of the current holdings; null without holdings.
    pub current: Option<Risk>,
    /// The scenario set.
    pub scenarios: Scenarios,
    /// The data-quality report of the price history.
    pub data_quality: QualityReport,
    /// Per kept asset: how often it is valued, the autocorrelation of its returns and any unsmoothing.
    pub valuation: Vec<AssetValuation>,
    /// The price history read.
    pub history: History,
    /// Every check the run made, with its outcome.
    pub checks: Vec<Check>,
    /// The LP solver used.
    pub solver: Solver,
    /// Every archived input file with its digest.
    pub inputs: Vec<InputFile>,
    /// The sign-off block of the draft (roles unsigned); null without configured roles.
    pub signoff: Option<Signoff>,
    /// The efficient frontier; null when switched off.
    pub frontier: Option<Frontier>,
    /// The stress set and each portfolio's result.
    pub stress: Stress,
    /// The walk-forward backtest; null when switched off.
    pub backtest: Option<Backtest>,
    /// Position against the investment policy; null without a policy.
    pub policy: Option<Policy>,
    /// Estimation-error bands from bootstrap resamples; null when switched off.
    pub bands: Option<Bands>,
    /// Liabilities, funded status and surplus risk; null without liabilities.
    pub liabilities: Option<Liabilities>,
    /// The change since the fund's previous pack.
    #[schemars(with = "Change")]
    pub change: serde_json::Value,
}

/// The program that wrote the file.
#[derive(Serialize, JsonSchema)]
pub struct Tool {
    /// Always `tailpack`.
    pub name: String,
    /// The program's version.
    pub version: String,
}

/// The fund as the config names it.
#[derive(Serialize, JsonSchema)]
pub struct Fund {
    /// `fund.name`.
    pub name: String,
    /// The fund's folder name in the archive.
    pub short_name: String,
    /// `fund.prepared_for`; null without one.
    pub prepared_for: Option<String>,
    /// `fund.prepared_by`; null without one.
    pub prepared_by: Option<String>,
}

/// Transaction cost rates.
#[derive(Serialize, JsonSchema)]
pub struct Costs {
    /// Asset code → one-way cost rate, a fraction of the amount traded (0.001 = 10 basis points).
    pub rates: PerAsset,
}

/// Currencies, hedging and currency risk.
#[derive(Serialize, JsonSchema)]
pub struct Currency {
    /// ISO 4217 code of the base currency; null without one.
    pub base: Option<String>,
    /// Per asset, in asset order: its currency and hedge ratio.
    pub per_asset: Vec<AssetCurrency>,
    /// Currency code → annual interest rate differential (base-currency rate minus the currency's), a
    /// fraction a year.
    pub rate_differential: BTreeMap<String, f64>,
    /// Portfolio → currency code → exposure, fractions of the portfolio's value.
    pub exposure: BTreeMap<String, BTreeMap<String, CurrencyExposure>>,
    /// Portfolio → CVaR with and without currency moves.
    pub cvar: BTreeMap<String, CurrencyCvar>,
}

/// One asset's currency.
#[derive(Serialize, JsonSchema)]
pub struct AssetCurrency {
    /// Asset code.
    pub asset: String,
    /// ISO 4217 code of the asset's currency (the base currency's when it has none); null without a base
    /// currency.
    pub currency: Option<String>,
    /// The share of its currency exposure hedged, a fraction in [0, 1].
    pub hedge_ratio: f64,
}

/// A portfolio's exposure to one foreign currency.
#[derive(Serialize, JsonSchema)]
pub struct CurrencyExposure {
    /// Exposure before hedging, a fraction of the portfolio's value.
    pub before_hedging: f64,
    /// Exposure after hedging, a fraction of the portfolio's value.
    pub after_hedging: f64,
}

/// A portfolio's CVaR with and without currency moves.
#[derive(Serialize, JsonSchema)]
pub struct CurrencyCvar {
    /// CVaR at the model confidence in the base currency, a loss as a fraction of value per horizon.
    pub cvar: f64,
    /// The same with exchange rates held fixed, a fraction of value per horizon.
    pub cvar_without_currency_moves: f64,
    /// (cvar − cvar_without_currency_moves) / cvar, a fraction; null when cvar is not positive.
    pub currency_share: Option<f64>,
}

/// One model's outcome. The figures are present only when the model has a portfolio.
#[derive(Serialize, JsonSchema)]
pub struct Model {
    /// `optimal`, `infeasible`, `not_applicable` or `solver_error`.
    pub status: String,
    /// Why the model has no portfolio (or a remark on it).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub message: Option<String>,
    /// The portfolio's figures, when it has one.
    #[serde(flatten)]
    pub solved: Option<Solved>,
}

/// A solved model's portfolio and figures.
#[derive(Serialize, JsonSchema)]
pub struct Solved {
    /// Asset code → weight, a fraction of the fund's value.
    pub weights: PerAsset,
    /// Expected return, a fraction of value per horizon (before transaction costs).
    pub expected_return: f64,
    /// VaR at the model confidence, a loss as a fraction of value per horizon.
    pub var: f64,
    /// CVaR at the model confidence, a loss as a fraction of value per horizon.
    pub cvar: f64,
    /// Max-ratio model only: expected return (net of costs when charged) / CVaR, both per horizon (a pure
    /// number).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ratio: Option<Option<f64>>,
    /// Max-ratio model only: the Charnes–Cooper scale t of the solved LP (a pure number).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub scale_t: Option<Option<f64>>,
    /// The LP's objective value, in the unit of the family's objective (a fraction of value per horizon,
    /// or the ratio).
    pub objective: Option<f64>,
    /// Σ|x − current| from the current holdings, a fraction of the fund's value; null without holdings.
    pub turnover: Option<f64>,
    /// One-way transaction cost of getting there, a fraction of the fund's value (× 10 000 for basis
    /// points).
    pub cost: Option<f64>,
    /// Expected return net of that cost, a fraction of value per horizon.
    pub expected_return_net: Option<f64>,
    /// Assets at their upper bound.
    pub at_upper_bound: Vec<String>,
    /// Assets at a positive lower bound.
    pub at_lower_bound: Vec<String>,
    /// The largest violation of a constraint by the solution, in the constraint's unit (weights:
    /// fraction of value).
    pub max_violation: Option<f64>,
    /// The portfolio's risk profile.
    pub risk: Risk,
}

/// A portfolio's risk profile.
#[derive(Serialize, JsonSchema)]
pub struct Risk {
    /// Expected return, a fraction of value per horizon.
    pub expected_return: f64,
    /// Probability-weighted standard deviation of the scenario returns, a fraction of value per horizon.
    pub volatility: f64,
    /// VaR and CVaR at every reported level.
    pub levels: Vec<Tail>,
    /// Asset code → its contribution to CVaR at the model confidence (Euler), a fraction of value per
    /// horizon; they add up to the CVaR.
    pub component_cvar: PerAsset,
    /// Class → the sum of its assets' contributions, a fraction of value per horizon.
    pub component_cvar_by_class: BTreeMap<String, f64>,
    /// The largest scenario loss, a fraction of value per horizon.
    pub worst_loss: f64,
    /// The label (`start/end`) of the scenario with that loss.
    pub worst_scenario: String,
    /// 1 / Σ w²: the number of equal holdings with the same concentration (a count, not necessarily whole).
    pub effective_holdings: f64,
}

/// The feasible set the models solved over.
#[derive(Serialize, JsonSchema)]
pub struct Constraints {
    /// Asset code → lower bound on its weight, a fraction of the fund's value.
    pub lower: PerAsset,
    /// Asset code → upper bound on its weight, a fraction of the fund's value.
    pub upper: PerAsset,
    /// Group limits.
    pub groups: Vec<Group>,
    /// Limit on Σ|x − current|, a fraction of the fund's value; null without one.
    pub turnover_max: Option<f64>,
    /// Asset code → current weight, a fraction of the fund's value; null without holdings.
    pub current: Option<PerAsset>,
    /// The CVaR cap the cap model used, a loss as a fraction of value per horizon; null when its rule
    /// could not be evaluated (the figure it is relative to has no value).
    pub cvar_cap: Option<f64>,
    /// The return floor the floor model used, a fraction of value per horizon; null as `cvar_cap`.
    pub return_floor: Option<f64>,
    /// Asset codes excluded by the config.
    pub excluded: Vec<String>,
}

/// A group limit: the members' summed weight lies in [min, max].
#[derive(Serialize, JsonSchema)]
pub struct Group {
    /// The group's name.
    pub name: String,
    /// Asset codes of its members.
    pub members: Vec<String>,
    /// Lower limit on the summed weight, a fraction of the fund's value.
    pub min: f64,
    /// Upper limit on the summed weight, a fraction of the fund's value.
    pub max: f64,
}

/// The scenario set.
#[derive(Serialize, JsonSchema)]
pub struct Scenarios {
    /// Number of scenarios.
    pub count: usize,
    /// Horizon, in observations of `frequency`.
    pub horizon: usize,
    /// Distance between the starts of consecutive windows, in observations.
    pub step: usize,
    /// First window's start date (YYYY-MM-DD); null without scenarios.
    pub first_start: Option<String>,
    /// Last window's end date (YYYY-MM-DD); null without scenarios.
    pub last_end: Option<String>,
    /// Whether every scenario has the same probability.
    pub equal_probabilities: bool,
    /// Half-life of the exponentially decaying probabilities, in observations; null for equal ones.
    pub half_life: Option<f64>,
    /// Years of history before as-of used, in years.
    pub lookback_years: u32,
    /// The observations scenarios are built on.
    pub frequency: crate::config::Frequency,
    /// Where the scenarios came from.
    pub source: ScenarioSource,
}

/// Where the scenarios came from: the price history, or a scenario file (`data.scenarios`).
#[derive(Serialize, JsonSchema)]
pub struct ScenarioSource {
    /// `price_history`, or `file`.
    pub kind: String,
    /// The scenario file as the config names it (`file` only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
    /// The archived copy's path in the pack (`file` only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub archived: Option<String>,
    /// The archived copy's SHA-256, hex (`file` only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sha256: Option<String>,
    /// What needs the price history and was not run on the file's scenarios (`file` only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub not_run: Option<Vec<String>>,
}

/// The price history read.
#[derive(Serialize, JsonSchema)]
pub struct History {
    /// First price date (YYYY-MM-DD).
    pub first: String,
    /// Last price date (YYYY-MM-DD).
    pub last: String,
    /// The price file's layout.
    pub layout: crate::config::Layout,
}

/// The LP solver used.
#[derive(Serialize, JsonSchema)]
pub struct Solver {
    /// `highs` or `clarabel`.
    pub backend: String,
    /// The solver and its settings, in words.
    pub description: String,
}

/// A sign-off block: each configured role and its signature.
#[derive(Serialize, JsonSchema)]
pub struct Signoff {
    /// `DRAFT` in results.json (the final PDF shows `FINAL`).
    pub status: String,
    /// The configured roles, in config order.
    pub roles: Vec<SignoffRole>,
}

/// One role of the sign-off block.
#[derive(Serialize, JsonSchema)]
pub struct SignoffRole {
    /// The role's key.
    pub role: String,
    /// The role's title as printed.
    pub title: String,
    /// The signer's name; null until signed.
    pub name: Option<String>,
    /// When signed (RFC 3339, UTC); null until signed.
    pub signed_at: Option<String>,
    /// Fingerprint of the signing key (16 hex digits); null until signed.
    pub fingerprint: Option<String>,
}

/// The efficient frontier.
#[derive(Serialize, JsonSchema)]
pub struct Frontier {
    /// The confidence level of its CVaR, a fraction.
    pub confidence: f64,
    /// The least CVaR over the feasible set, a fraction of value per horizon.
    pub min_cvar: f64,
    /// The CVaR of the highest-return portfolio, a fraction of value per horizon.
    pub max_return_cvar: f64,
    /// The points of the sweep, by rising CVaR cap.
    pub points: Vec<FrontierPoint>,
}

/// One point of the frontier: the highest expected return under a CVaR cap.
#[derive(Serialize, JsonSchema)]
pub struct FrontierPoint {
    /// The CVaR cap, a loss as a fraction of value per horizon.
    pub cvar_cap: f64,
    /// The LP's status (as a model's `status`).
    pub status: String,
    /// Expected return, a fraction of value per horizon; null without a solution.
    pub expected_return: Option<f64>,
    /// CVaR, a fraction of value per horizon; null without a solution.
    pub cvar: Option<f64>,
    /// VaR, a fraction of value per horizon; null without a solution.
    pub var: Option<f64>,
    /// Asset code → weight, a fraction of value; null without a solution.
    pub weights: Option<PerAsset>,
}

/// The stress set and each portfolio's result.
#[derive(Serialize, JsonSchema)]
pub struct Stress {
    /// The stress loss limit, a loss as a fraction of value; null without one.
    pub loss_limit: Option<f64>,
    /// The shocks, in stress-set order.
    pub shocks: Vec<Shock>,
    /// Portfolio → its result under every shock.
    pub portfolios: BTreeMap<String, StressPortfolio>,
}

/// One shock of the stress set.
#[derive(Serialize, JsonSchema)]
pub struct Shock {
    /// The shock's name.
    pub name: String,
    /// `defined` (from the stress file) or `historical` (a window of the price history).
    pub kind: String,
    /// What the shock is.
    pub description: String,
    /// A historical window's first date (YYYY-MM-DD); null for a defined shock.
    pub start: Option<String>,
    /// A historical window's last date (YYYY-MM-DD); null for a defined shock.
    pub end: Option<String>,
    /// Asset code → its return in the shock, a fraction of its value.
    pub returns: PerAsset,
    /// Asset codes the shock does not move.
    pub unshocked: Vec<String>,
}

/// One portfolio under every shock.
#[derive(Serialize, JsonSchema)]
pub struct StressPortfolio {
    /// P&L per shock, in stress-set order, a fraction of the portfolio's value (negative: a loss).
    pub pnl: Vec<f64>,
    /// The worst shock.
    pub worst: WorstShock,
    /// Per shock, in order: class → its contribution to the P&L, a fraction of the portfolio's value.
    pub by_class: Vec<BTreeMap<String, f64>>,
    /// Names of the shocks whose loss exceeds the loss limit.
    pub breaches: Vec<String>,
}

/// A portfolio's worst shock.
#[derive(Serialize, JsonSchema)]
pub struct WorstShock {
    /// The shock's name; null without shocks.
    pub shock: Option<String>,
    /// Its P&L, a fraction of the portfolio's value; null without shocks.
    pub pnl: Option<f64>,
}

/// The walk-forward backtest.
#[derive(Serialize, JsonSchema)]
pub struct Backtest {
    /// The confidence level of the VaR tested, a fraction.
    pub confidence: f64,
    /// Number of rebalance dates.
    pub rebalances: usize,
    /// First rebalance date (YYYY-MM-DD); null without one.
    pub first: Option<String>,
    /// Last rebalance date (YYYY-MM-DD); null without one.
    pub last: Option<String>,
    /// Rebalance dates skipped, with the reason.
    pub skipped: Vec<Skipped>,
    /// Per rebalance date, the policy benchmark's realised return over the next period, a fraction;
    /// null without a policy (an entry is null where it is unknown).
    pub benchmark_returns: Option<Vec<Option<f64>>>,
    /// Model name → its track.
    pub models: BTreeMap<String, Track>,
    /// Per rebalance date, the liability proxy's realised return over the next period, a fraction; null
    /// without liabilities.
    pub liability_proxy_returns: Option<Vec<Option<f64>>>,
    /// `assets` or `surplus`: what the models minimised the risk of.
    pub basis: String,
}

/// A skipped rebalance date.
#[derive(Serialize, JsonSchema)]
pub struct Skipped {
    /// The date (YYYY-MM-DD).
    pub date: String,
    /// Why it was skipped.
    pub reason: String,
}

/// One model's backtest track.
#[derive(Serialize, JsonSchema)]
pub struct Track {
    /// Months with a prediction and a realised return.
    pub observations: usize,
    /// Months whose loss exceeded the predicted VaR.
    pub exceptions: usize,
    /// observations × (1 − confidence), a count.
    pub expected_exceptions: f64,
    /// Kupiec's unconditional-coverage test; null when it cannot be computed.
    pub kupiec: Option<crate::analysis::vartest::LrTest>,
    /// Christoffersen's independence test; null when it cannot be computed.
    pub christoffersen: Option<crate::analysis::vartest::LrTest>,
    /// Mean of predicted minus realised return, a fraction of value; null without months.
    pub mean_prediction_error: Option<f64>,
    /// Wealth at the end, starting from 1 (a multiple of the starting value).
    pub final_wealth: f64,
    /// The daily 99% VaR backtest with its Basel zone; null when not run.
    pub daily_var_99: Option<crate::analysis::backtest::DailyCheck>,
    /// Sum of the transaction costs charged, each a fraction of the wealth at its date.
    pub total_cost: f64,
    /// Realised active risk against the policy benchmark; null without a policy.
    pub ex_post_active: Option<crate::analysis::backtest::ExPost>,
    /// One row per rebalance date.
    pub months: Vec<TrackMonth>,
}

/// One rebalance date of a track.
#[derive(Serialize, JsonSchema)]
pub struct TrackMonth {
    /// The rebalance date (YYYY-MM-DD).
    pub date: String,
    /// The next rebalance date, where the realised return ends (YYYY-MM-DD).
    pub next: String,
    /// The model's status at this date.
    pub status: String,
    /// The portfolio's expected return on the scenarios of this date, a fraction of value per horizon;
    /// null without a portfolio.
    pub predicted_return: Option<f64>,
    /// Realised return from this date to the next (a month), a fraction of value; null without a
    /// portfolio.
    pub realised_return: Option<f64>,
    /// Predicted minus realised return (surplus return on the surplus basis), a fraction of value.
    pub predicted_minus_realised: Option<f64>,
    /// Predicted VaR at the backtest's confidence, a loss as a fraction of value per horizon.
    pub predicted_var: Option<f64>,
    /// Predicted CVaR at the backtest's confidence, a loss as a fraction of value per horizon.
    pub predicted_cvar: Option<f64>,
    /// Σ|w − drifted previous w| (the first month from the current holdings), a fraction of value.
    pub turnover: Option<f64>,
    /// Transaction cost charged at this date, a fraction of the wealth then.
    pub cost: Option<f64>,
    /// Realised return net of that cost, (1 − cost)(1 + realised) − 1, a fraction of value.
    pub realised_return_net: Option<f64>,
    /// Wealth after the month, starting from 1.
    pub wealth: f64,
    /// Whether the realised loss exceeded the predicted VaR; null without a prediction.
    pub exception: Option<bool>,
    /// Realised return net of costs less the policy benchmark's, a fraction of value; null without a
    /// policy.
    pub active_return: Option<f64>,
    /// Asset code → weight held, a fraction of value; null without a portfolio.
    pub weights: Option<PerAsset>,
    /// Realised surplus return (assets less liabilities), a fraction of the assets; null without
    /// liabilities.
    pub realised_surplus_return: Option<f64>,
}

/// Position against the investment policy.
#[derive(Serialize, JsonSchema)]
pub struct Policy {
    /// The policy lines, in config order.
    pub lines: Vec<PolicyLine>,
    /// Benchmark series → its target weight, a fraction of value.
    pub benchmark_weights: BTreeMap<String, f64>,
    /// Whether the policy ranges are imposed on the models as limits.
    pub ranges_as_limits: bool,
    /// The budget on active CVaR, a fraction of value per horizon; null without one.
    pub active_cvar_budget: Option<f64>,
    /// Horizons in a year, the annualisation factor of tracking error (a count a year).
    pub horizons_per_year: f64,
    /// How tracking error is annualised, in words.
    pub annualisation: String,
    /// Portfolio → its exposure per line and breaches.
    pub portfolios: BTreeMap<String, PolicyPortfolio>,
    /// Portfolio → its active risk against the policy benchmark.
    pub active: BTreeMap<String, Active>,
}

/// One policy line.
#[derive(Serialize, JsonSchema)]
pub struct PolicyLine {
    /// The line's name.
    pub name: String,
    /// Asset codes of its members.
    pub members: Vec<String>,
    /// Target weight, a fraction of value.
    pub target: f64,
    /// Range's lower end, a fraction of value.
    pub min: f64,
    /// Range's upper end, a fraction of value.
    pub max: f64,
    /// The benchmark series of the line.
    pub benchmark: String,
}

/// One portfolio against the policy lines.
#[derive(Serialize, JsonSchema)]
pub struct PolicyPortfolio {
    /// Exposure per line, in line order, a fraction of value.
    pub exposure: Vec<f64>,
    /// Exposure less target per line, in line order, a fraction of value.
    pub distance: Vec<f64>,
    /// Names of the lines whose exposure lies outside their range.
    pub breaches: Vec<String>,
}

/// One portfolio's active risk against the policy benchmark.
#[derive(Serialize, JsonSchema)]
pub struct Active {
    /// Mean active return, a fraction of value per horizon.
    pub active_return: f64,
    /// Tracking error, a fraction of value per horizon.
    pub tracking_error: f64,
    /// Tracking error × √horizons_per_year, a fraction of value, annualised.
    pub tracking_error_annualised: f64,
    /// Active CVaR at the model confidence, a loss as a fraction of value per horizon.
    pub active_cvar: f64,
    /// Active VaR and CVaR at every reported level.
    pub levels: Vec<Tail>,
    /// Class → its contribution to active CVaR, a fraction of value per horizon.
    pub active_cvar_by_class: BTreeMap<String, f64>,
    /// The benchmark's side of that split, a fraction of value per horizon.
    pub active_cvar_benchmark: f64,
}

/// Estimation-error bands from stationary-bootstrap resamples.
#[derive(Serialize, JsonSchema)]
pub struct Bands {
    /// Resamples drawn.
    pub resamples: usize,
    /// Mean block length of the stationary bootstrap, in observations.
    pub block_length: f64,
    /// Seed of resample 0, as decimal text (resample b uses seed + b).
    pub seed: String,
    /// The percentiles of every band, as fractions (0.05, 0.50, 0.95).
    pub percentiles: [f64; 3],
    /// Model name → its bands.
    pub models: BTreeMap<String, ModelBands>,
}

/// One model's bands.
#[derive(Serialize, JsonSchema)]
pub struct ModelBands {
    /// Resamples with an optimal solution (the percentiles are over these).
    pub solved: usize,
    /// Asset code → its weight's [p5, p50, p95], fractions of value (null when no resample solved).
    pub weights: BTreeMap<String, [Option<f64>; 3]>,
    /// Expected return on the original scenarios, [p5, p50, p95], fractions of value per horizon (null
    /// when no resample solved).
    pub expected_return: [Option<f64>; 3],
    /// CVaR at the model confidence on the original scenarios, [p5, p50, p95], fractions of value per
    /// horizon (null when no resample solved).
    pub cvar: [Option<f64>; 3],
    /// Asset code → share of solved resamples holding it above `held_above`, a fraction (null when no
    /// resample solved).
    pub held_share: BTreeMap<String, Option<f64>>,
    /// The weight above which an asset counts as held, a fraction of value.
    pub held_above: f64,
    /// Mean Σ|w* − w| between each resample's weights and the point solution, a fraction of value; null
    /// without a point solution.
    pub mean_turnover_from_point: Option<f64>,
}

/// Liabilities, funded status and surplus risk.
#[derive(Serialize, JsonSchema)]
pub struct Liabilities {
    /// Present value of the liabilities, in the base currency.
    pub value: f64,
    /// Fund value / liabilities, a ratio (1.0 = fully funded).
    pub funded_ratio: f64,
    /// The asset code of the liability proxy series.
    pub proxy: String,
    /// Modified duration of the liabilities, in years; null without one.
    pub duration: Option<f64>,
    /// Convexity of the liabilities, in years²; null without one.
    pub convexity: Option<f64>,
    /// `assets` or `surplus`: what the models minimised the risk of.
    pub basis: String,
    /// The move of the discount rate the funded ratio is shown at, either way, a fraction (0.01 = 1 pp).
    pub rate_move: f64,
    /// The worst share of scenarios `funded_ratio_tail` averages over, a fraction.
    pub funded_ratio_tail_share: f64,
    /// Per shock, in stress-set order: the proxy's return in it.
    pub stress_proxy_returns: Vec<ProxyReturn>,
    /// Portfolio → its surplus figures.
    pub portfolios: BTreeMap<String, Surplus>,
}

/// The liability proxy's return in one shock.
#[derive(Serialize, JsonSchema)]
pub struct ProxyReturn {
    /// The shock's name.
    pub shock: String,
    /// The proxy's return, a fraction; null when the shock leaves the liabilities unchanged.
    pub proxy_return: Option<f64>,
}

/// One portfolio's surplus risk.
#[derive(Serialize, JsonSchema)]
pub struct Surplus {
    /// Surplus VaR at the model confidence, a loss as a fraction of the assets per horizon.
    pub surplus_var: f64,
    /// Surplus CVaR at the model confidence, a loss as a fraction of the assets per horizon.
    pub surplus_cvar: f64,
    /// Expected surplus return, a fraction of the assets per horizon.
    pub surplus_expected_return: f64,
    /// Standard deviation of the surplus return, a fraction of the assets per horizon.
    pub surplus_volatility: f64,
    /// Surplus VaR and CVaR at every reported level (fractions of the assets per horizon).
    pub levels: Vec<Tail>,
    /// Mean funded ratio at the end of the horizon over the worst `funded_ratio_tail_share` of
    /// scenarios, a ratio.
    pub funded_ratio_tail: f64,
    /// Share of the liabilities' rate sensitivity the assets hedge, a fraction; null without durations.
    pub hedge_ratio: Option<f64>,
    /// Funded ratio with the discount rate `rate_move` lower, a ratio; null without durations.
    pub funded_ratio_rate_down: Option<f64>,
    /// Funded ratio with the discount rate `rate_move` higher, a ratio; null without durations.
    pub funded_ratio_rate_up: Option<f64>,
    /// Per shock, in stress-set order.
    pub stress: Vec<SurplusShock>,
}

/// A portfolio's surplus under one shock.
#[derive(Serialize, JsonSchema)]
pub struct SurplusShock {
    /// The shock's name.
    pub shock: String,
    /// Change in surplus, a fraction of the assets.
    pub surplus_change: f64,
    /// Funded ratio after the shock, a ratio.
    pub funded_ratio: f64,
}

pub use change::Change;

/// The `change` block's shape. `analysis::change::section` builds it as JSON (it compares two
/// results.json documents); these types describe it for the schema, and the suite validates every
/// written `change` against them.
mod change {
    use schemars::JsonSchema;
    use std::collections::BTreeMap;

    /// The change since the fund's previous pack.
    #[derive(JsonSchema)]
    pub struct Change {
        /// The previous pack; null for a fund's first pack.
        pub previous: Option<Previous>,
        /// Why there is no comparison (first pack, or the previous one fails verification).
        pub note: Option<String>,
        /// How the previous pack is chosen and the CVaR change split, in words.
        pub rule: String,
        /// What each pack's VaR and CVaR measure (`risk.basis`): `assets` or `surplus`; absent when
        /// the previous pack is not used.
        pub basis: Option<Pair>,
        /// The current portfolio's CVaR change split into holdings and market effects; null when the
        /// previous pack is not used.
        pub current_cvar: Option<CurrentCvar>,
        /// Portfolio → its figures before and after.
        pub portfolios: Option<BTreeMap<String, PortfolioChange>>,
        /// Portfolio → shock name → its P&L before and after, fractions of value.
        pub stress: Option<BTreeMap<String, BTreeMap<String, Delta>>>,
        /// Open checks (warn or fail) by id.
        pub checks: Option<CheckChanges>,
        /// How the data changed.
        pub data: Option<DataChange>,
        /// The current portfolio's figures, oldest pack first, this pack last.
        pub history: Vec<HistoryPoint>,
    }

    /// The previous pack compared with.
    #[derive(JsonSchema)]
    pub struct Previous {
        /// Its pack id.
        pub pack_id: String,
        /// Its as-of date (YYYY-MM-DD).
        pub as_of: String,
        /// Its revision number.
        pub revision: u32,
        /// Whether it passed verification.
        pub verified: bool,
        /// Whether it was finalised.
        #[serde(rename = "final")]
        pub final_pack: bool,
        /// Its folder relative to the archive root (`<fund>/<as-of>/r<N>`).
        pub folder: String,
    }

    /// The split of the current portfolio's CVaR change (Rockafellar & Uryasev 2002), fractions of value
    /// per horizon; only `note` when it cannot be made.
    #[derive(JsonSchema)]
    pub struct CurrentCvar {
        /// Why there is no split.
        pub note: Option<String>,
        /// CVaR of last month's holdings on last month's scenarios, a fraction of value per horizon.
        pub before: Option<f64>,
        /// CVaR of this month's holdings on this month's scenarios, a fraction of value per horizon.
        pub after: Option<f64>,
        /// The part of the change due to the holdings, a fraction of value per horizon.
        pub holdings_effect: Option<f64>,
        /// The part of the change due to the market, a fraction of value per horizon.
        pub market_effect: Option<f64>,
        /// CVaR of this month's holdings on last month's scenarios, a fraction of value per horizon.
        pub holdings_on_previous_scenarios: Option<f64>,
        /// The confidence level of these CVaRs, a fraction.
        pub confidence: Option<f64>,
        /// `assets`, or `surplus`: then every CVaR here is a surplus CVaR, a fraction of the assets'
        /// value per horizon.
        pub basis: Option<String>,
    }

    /// A figure before and after, and the change (after − before), in the figure's unit; a side is
    /// null where it is missing.
    #[derive(JsonSchema)]
    pub struct Delta {
        /// The previous pack's figure.
        pub before: Option<f64>,
        /// This pack's figure.
        pub after: Option<f64>,
        /// after − before; null unless both are numbers.
        pub change: Option<f64>,
    }

    /// A text before and after.
    #[derive(JsonSchema)]
    pub struct Pair {
        /// The previous pack's value.
        pub before: Option<String>,
        /// This pack's value.
        pub after: Option<String>,
    }

    /// A portfolio before and after.
    #[derive(JsonSchema)]
    pub struct PortfolioChange {
        /// The model's status before and after.
        pub status: Pair,
        /// Asset code → weight before and after, fractions of value (0 where absent).
        pub weights: BTreeMap<String, Delta>,
        /// Class → weight before and after, fractions of value.
        pub by_class: BTreeMap<String, Delta>,
        /// Expected return, a fraction of value per horizon.
        pub expected_return: Delta,
        /// VaR at the model confidence, a fraction of value per horizon.
        pub var: Delta,
        /// CVaR at the model confidence, a fraction of value per horizon.
        pub cvar: Delta,
        /// Active CVaR, a fraction of value per horizon.
        pub active_cvar: Delta,
        /// Transaction cost, a fraction of the fund's value.
        pub cost: Delta,
    }

    /// Open checks by id.
    #[derive(JsonSchema)]
    pub struct CheckChanges {
        /// Open now, not before.
        pub new: Vec<String>,
        /// Open before, not now.
        pub resolved: Vec<String>,
        /// Open before and now.
        pub still_open: Vec<String>,
    }

    /// How the data changed.
    #[derive(JsonSchema)]
    pub struct DataChange {
        /// Asset codes new in this pack.
        pub assets_added: Vec<String>,
        /// Asset codes of the previous pack no longer present.
        pub assets_dropped: Vec<String>,
        /// How the scenario window moved.
        pub scenarios: ScenarioChange,
    }

    /// How the scenario window moved.
    #[derive(JsonSchema)]
    pub struct ScenarioChange {
        /// Number of scenarios before and after.
        pub count: Delta,
        /// First window's start date before and after (YYYY-MM-DD).
        pub first_start: Pair,
        /// Last window's end date before and after (YYYY-MM-DD).
        pub last_end: Pair,
        /// Scenarios new and gone, by label; null when the previous scenarios could not be read.
        pub moved: Option<Moved>,
    }

    /// Scenarios new and gone.
    #[derive(JsonSchema)]
    pub struct Moved {
        /// Scenarios in this pack only (a count).
        pub new: usize,
        /// Scenarios in the previous pack only (a count).
        pub dropped: usize,
    }

    /// One pack's point of the history; the figures are absent for a pack that fails verification.
    #[derive(JsonSchema)]
    pub struct HistoryPoint {
        /// Its pack id.
        pub pack_id: String,
        /// Its as-of date (YYYY-MM-DD).
        pub as_of: String,
        /// Its revision number; null for this pack (not yet numbered when the results are made).
        pub revision: Option<u32>,
        /// Whether it passed verification.
        pub verified: bool,
        /// Whether it was finalised.
        #[serde(rename = "final")]
        pub final_pack: bool,
        /// Expected return of the current holdings, a fraction of value per horizon.
        pub expected_return: Option<f64>,
        /// CVaR of the current holdings at the pack's confidence, a fraction of value per horizon.
        pub cvar: Option<f64>,
        /// The worst stress loss, a fraction of value.
        pub worst_stress_loss: Option<f64>,
        /// Shocks beyond the loss limit (a count).
        pub stress_breaches: Option<usize>,
        /// Policy lines outside their range (a count).
        pub policy_breaches: Option<usize>,
    }
}
