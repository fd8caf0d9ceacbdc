//! Stage 0, config: the YAML file as written ([`raw`]) and the validated, resolved form ([`Config`]).
//!
//! Only this module reads the config file and the stress file it names. Both are bounded before they are
//! parsed (file size, then the length of every text value, see [`yaml`]); paths are resolved against the
//! config file's folder, ranges are checked with messages that name the key and its line, and unknown keys
//! are rejected with the nearest valid key ([`keys`]). The input files a run reads are declared once, in
//! [`inputs`]. Command-line overrides ([`Overrides`]) are applied while resolving; the rest of the program
//! only ever sees [`Config`], which nothing changes after. Defaults are written once, in the `Default`
//! impls of [`raw`].
//!
//! Files: [`raw`] (the serde structs), [`read`] (bounded text, parsing), [`load`] (one config per fund,
//! archived configs), [`resolve`] and [`checks`] (raw → resolved), [`stress`] (the stress file),
//! [`inputs`] (the registry of input files), [`keys`] (unknown keys), [`yaml`] (text bounds, key lines).

pub mod checks;
pub mod inputs;
pub mod keys;
pub mod liabilities;
pub mod load;
pub mod policy;
pub mod raw;
pub mod read;
pub mod resolve;
pub mod stress;
pub mod yaml;

use chrono::NaiveDate;
use std::path::{Path, PathBuf};

pub use inputs::Input;
pub use keys::nearest;
pub use liabilities::Liabilities;
pub use load::{load, load_all, load_archived, load_fund};
pub use raw::*;
pub use read::parse;
pub use resolve::{resolve, resolve_with, slug};
pub use stress::{MoveSpec, ShockSpec, StressFile, load_stress, parse_stress, tag_holds};
pub use yaml::{MAX_FILE_BYTES, MAX_NAME_CHARS, MAX_PARAGRAPH_CHARS, MAX_PATH_BYTES};

/// Command-line settings that replace the config's own, applied while the config is resolved.
#[derive(Debug, Clone, Default)]
pub struct Overrides {
    /// `--as-of`: the as-of date instead of the latest month-end in the data.
    pub as_of: Option<NaiveDate>,
    /// `--out`: the pack root instead of `output.root`.
    pub out: Option<PathBuf>,
    /// `--solver`: the LP backend instead of `solver.backend`.
    pub backend: Option<Backend>,
}

/// Who the pack is for, as printed (the folder-safe short name is [`Config::short_name`]).
#[derive(Debug, Clone)]
pub struct Fund {
    pub name: String,
    pub prepared_for: Option<String>,
    pub prepared_by: Option<String>,
    /// The fund's value and its base currency (`fund.value`, `fund.base_currency`), when given: the
    /// pack shows money figures (trades, costs) only with them.
    pub money: Option<Money>,
}

/// The currency settings (`fund.base_currency`, the `currency` section), resolved.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Currency {
    /// `fund.base_currency`, when given: the currency every price is converted into.
    pub base: Option<String>,
    /// Hedge ratios in [0, 1] per asset class (lower case), per `column:value` tag and per asset code.
    pub hedge_class: std::collections::BTreeMap<String, f64>,
    pub hedge_tag: std::collections::BTreeMap<String, f64>,
    pub hedge_asset: std::collections::BTreeMap<String, f64>,
    /// Annual interest rate differential per currency (base-currency rate minus the currency's rate), as
    /// a fraction: the forward premium of covered interest parity.
    pub rate_differential: std::collections::BTreeMap<String, f64>,
}

/// The fund's value in its base currency.
#[derive(Debug, Clone, PartialEq)]
pub struct Money {
    pub value: f64,
    /// ISO 4217 code: three upper-case letters.
    pub currency: String,
}

/// One-way transaction cost rates as fractions of the amount traded (`costs.class_bps`,
/// `costs.asset_bps` divided by 10,000), resolved per asset by [`CostRates::rate`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CostRates {
    /// Per asset class, lower case (as the asset metadata's classes are read).
    pub class: std::collections::BTreeMap<String, f64>,
    /// Per asset code.
    pub asset: std::collections::BTreeMap<String, f64>,
}

impl CostRates {
    /// The rate of `asset` of class `class`: its own, else its class's, else 0.
    pub fn rate(&self, asset: &str, class: &str) -> f64 {
        self.asset
            .get(asset)
            .or_else(|| self.class.get(&class.to_ascii_lowercase()))
            .copied()
            .unwrap_or(0.0)
    }

    /// Whether any rate is positive.
    pub fn any(&self) -> bool {
        self.class
            .values()
            .chain(self.asset.values())
            .any(|&r| r > 0.0)
    }
}

/// The typesetter's budget for one PDF (`report.typeset_seconds`, `report.typeset_memory_mb`).
#[derive(Debug, Clone, Copy)]
pub struct TypesetBudget {
    pub seconds: u64,
    pub memory_mb: u64,
}

/// A group limit with its members resolved later against the asset list.
#[derive(Debug, Clone, serde::Serialize, schemars::JsonSchema)]
pub struct GroupSpec {
    /// The group's name.
    pub name: String,
    /// How its members are chosen.
    pub selector: GroupSelector,
    /// Lower limit on the members' summed weight, a fraction of the fund's value.
    pub min: f64,
    /// Upper limit on the members' summed weight, a fraction of the fund's value.
    pub max: f64,
}

/// How a group's members are chosen.
#[derive(Debug, Clone, serde::Serialize, schemars::JsonSchema)]
pub enum GroupSelector {
    /// The assets whose metadata column `column` holds `value`.
    Tag {
        /// A column of the asset metadata.
        column: String,
        /// The value that selects an asset.
        value: String,
    },
    /// The assets listed by code.
    Assets(Vec<String>),
}

/// The policy portfolio (`policy`): its lines and whether the models keep to its ranges.
#[derive(Debug, Clone, serde::Serialize, schemars::JsonSchema)]
pub struct Policy {
    /// The policy lines, in config order.
    pub lines: Vec<PolicyLine>,
    /// `policy.ranges_as_limits`: each line's range is a group limit of every model.
    pub ranges_as_limits: bool,
    /// `policy.active_cvar_budget`: every model keeps its active CVaR against the policy benchmark, at the
    /// model confidence, at or below this fraction of the fund's value.
    pub active_cvar_budget: Option<f64>,
}

/// One policy line, its members resolved later against the asset list (as a group's are).
#[derive(Debug, Clone, serde::Serialize, schemars::JsonSchema)]
pub struct PolicyLine {
    /// The line's name.
    pub name: String,
    /// How its members are chosen.
    pub selector: GroupSelector,
    /// Target weight, a fraction of the fund's value.
    pub target: f64,
    /// Range's lower end, a fraction of the fund's value.
    pub min: f64,
    /// Range's upper end, a fraction of the fund's value.
    pub max: f64,
    /// The price-file series that measures the line in the policy benchmark.
    pub benchmark: String,
}

impl Policy {
    /// Σ target per benchmark series (lines sharing a series add up), series in the order the lines first
    /// name them: the policy benchmark as a fixed mix of series.
    pub fn benchmark_weights(&self) -> Vec<(String, f64)> {
        self.series()
            .into_iter()
            .map(|s| {
                let w = self
                    .lines
                    .iter()
                    .filter(|l| l.benchmark == s)
                    .map(|l| l.target)
                    .sum();
                (s.to_string(), w)
            })
            .collect()
    }

    /// The benchmark series, each once, in the order the lines first name them.
    pub fn series(&self) -> Vec<&str> {
        let mut out: Vec<&str> = Vec::new();
        for l in &self.lines {
            if !out.contains(&l.benchmark.as_str()) {
                out.push(&l.benchmark);
            }
        }
        out
    }
}

/// A resolved CVaR cap rule.
#[derive(Debug, Clone, Copy, serde::Serialize, schemars::JsonSchema)]
pub enum CapRule {
    /// A CVaR cap, a loss as a fraction of value per horizon.
    Value(f64),
    /// A multiple of the current holdings' CVaR.
    TimesCurrent(f64),
    /// A multiple of the least CVaR over the feasible set.
    TimesMin(f64),
}

/// A resolved return floor rule.
#[derive(Debug, Clone, Copy, serde::Serialize, schemars::JsonSchema)]
pub enum FloorRule {
    /// A return floor, a fraction of value per horizon.
    Value(f64),
    /// The current holdings' expected return plus this margin, a fraction of value per horizon.
    PlusCurrent(f64),
}

/// The validated config every later stage sees.
#[derive(Debug, Clone)]
pub struct Config {
    /// The config file ([`Input::Config`]).
    pub path: PathBuf,
    pub fund: Fund,
    pub short_name: String,
    /// The as-of date asked for (`--as-of`); without one, the latest month-end in the data.
    pub as_of: Option<NaiveDate>,
    /// The price file ([`Input::Prices`]); only with a scenario file may it be left out.
    pub prices: Option<PathBuf>,
    pub layout: Layout,
    /// The asset metadata file ([`Input::Assets`]).
    pub assets: PathBuf,
    /// The current holdings ([`Input::Holdings`]).
    pub holdings: Option<PathBuf>,
    /// The exchange-rate file ([`Input::Fx`]).
    pub fx: Option<PathBuf>,
    /// Price-file columns the fund leaves out (`data.skip_columns`): removed right after the file is read.
    pub skip_columns: Vec<String>,
    /// The scenario file ([`Input::Scenarios`]): when set, the models' scenarios come from it instead of
    /// the price history.
    pub scenario_file: Option<PathBuf>,
    /// The scenario file's name as the config writes it (results.json and the PDF name it so: a re-run
    /// reads the archived copy, which has another name).
    pub scenario_name: Option<String>,
    /// The currency settings: base currency, hedge ratios, rate differentials.
    pub currency: Currency,
    pub quality: QualityOptions,
    pub scenarios: ScenarioOptions,
    pub levels: Vec<f64>,
    pub confidence: f64,
    pub default_min: f64,
    pub default_max: f64,
    pub exclude: Vec<String>,
    pub groups: Vec<GroupSpec>,
    pub turnover_max: Option<f64>,
    /// The policy portfolio, when configured.
    pub policy: Option<Policy>,
    pub cap: CapRule,
    pub floor: FloorRule,
    /// Transaction cost rates (`costs`); all zero when the section is absent.
    pub costs: CostRates,
    /// `--solver`, else `solver.backend`.
    pub backend: Backend,
    /// The pack root: `--out`, else `output.root`, else [`DEFAULT_OUT_ROOT`].
    pub out_root: PathBuf,
    pub analysis: AnalysisOptions,
    /// The stress file ([`Input::Stress`]).
    pub stress_file: Option<PathBuf>,
    /// The stress file's name as the config writes it, for the PDF: a re-run from the archived copy (named
    /// `stress.yaml`) prints the same name.
    pub stress_name: Option<String>,
    /// The stress file's shocks, read and checked (shape, ranges, unique names) when the config is loaded
    /// ([`load_all`]); checked against the data in `run::prepare_fund`.
    pub stress: Option<StressFile>,
    pub stress_loss_limit: Option<f64>,
    pub stress_windows: usize,
    /// Custom template folder ([`Input::Templates`]), resolved and checked to be a folder.
    pub templates: Option<PathBuf>,
    /// Time and memory the typesetter may use for one PDF.
    pub typeset: TypesetBudget,
    /// Required sign-off roles, in signing order.
    pub signoff: Vec<SignRole>,
    /// The liabilities the assets back (`liabilities`), when configured.
    pub liabilities: Option<Liabilities>,
    /// What the models' CVaR measures (`risk.basis`): surplus only with liabilities.
    pub basis: Basis,
}

impl Config {
    /// The price file, on the paths that read prices (every run without a scenario file has one:
    /// resolution requires it).
    pub fn price_file(&self) -> &Path {
        self.prices
            .as_deref()
            .expect("a price file: required without data.scenarios")
    }

    /// Where this config reads an input from (none for an input it does not name, or the run record).
    pub fn input(&self, kind: Input) -> Option<&Path> {
        match kind {
            Input::Config => Some(&self.path),
            Input::Prices => self.prices.as_deref(),
            Input::Assets => Some(&self.assets),
            Input::Holdings => self.holdings.as_deref(),
            Input::Fx => self.fx.as_deref(),
            Input::Scenarios => self.scenario_file.as_deref(),
            Input::Stress => self.stress_file.as_deref(),
            Input::Templates => self.templates.as_deref(),
            Input::Run => None,
        }
    }
}
