//! Stage 0, config: the YAML file as written (`RawConfig`) and the validated, resolved form (`Config`).
//!
//! Only this module reads the config file and the stress file it names. Both are bounded before they are
//! parsed (file size, then the length of every text value, see [`yaml`]); paths are resolved against the
//! config file's folder, ranges are checked with messages that name the key and its line, and unknown keys
//! are rejected with the nearest valid key. The rest of the program only ever sees [`Config`]. Defaults
//! are written once, in the `Default` impls.

pub mod yaml;

use crate::error::{Error, Result};
use serde::Deserialize;
use std::path::{Path, PathBuf};
pub use yaml::{MAX_FILE_BYTES, MAX_NAME_CHARS, MAX_PARAGRAPH_CHARS, MAX_PATH_BYTES};

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
    pub models: RawModels,
    pub solver: SolverOptions,
    pub output: RawOutput,
    pub analysis: AnalysisOptions,
    pub stress: RawStress,
    pub report: RawReport,
    pub signoff: RawSignoff,
    /// Several funds (mandates) in one config: each entry overrides `fund` and, where given, the holdings,
    /// limits, models and sign-off of the shared settings; prices and asset metadata are shared.
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
#[derive(Debug, Deserialize, Clone, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct AnalysisOptions {
    /// Points on the efficient frontier, from the min-CVaR to the max-return portfolio.
    pub frontier_points: usize,
    /// Years of month-ends before as-of at which the walk-forward backtest rebalances (0 turns it off).
    pub backtest_years: u32,
    /// Also backtest a daily 99% VaR over the last 250 observations (Basel traffic light).
    pub daily_var_check: bool,
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        AnalysisOptions {
            frontier_points: 21,
            backtest_years: 5,
            daily_var_check: true,
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
}

/// Where the input files are.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawData {
    pub prices: Option<PathBuf>,
    pub layout: Layout,
    pub assets: Option<PathBuf>,
    pub holdings: Option<PathBuf>,
}

/// Shape of the price file.
#[derive(Debug, Deserialize, Default, Clone, Copy, PartialEq, Eq, serde::Serialize)]
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
#[derive(Debug, Deserialize, Clone, serde::Serialize)]
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
}

impl Default for QualityOptions {
    fn default() -> Self {
        QualityOptions {
            max_fill: 3,
            stale_run: 10,
            extreme_move: 0.25,
            min_obs_per_asset: 10,
        }
    }
}

/// How scenarios are cut from the price history.
#[derive(Debug, Deserialize, Clone, serde::Serialize)]
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
}

impl Default for ScenarioOptions {
    fn default() -> Self {
        ScenarioOptions {
            horizon: 21,
            step: 1,
            lookback_years: 5,
            half_life: None,
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
}

impl Default for RawRisk {
    fn default() -> Self {
        RawRisk {
            levels: vec![0.95, 0.975, 0.99],
            confidence: 0.95,
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

/// Model-specific settings.
#[derive(Debug, Deserialize, Default, Clone)]
#[serde(deny_unknown_fields, default)]
pub struct RawModels {
    pub max_return: RawMaxReturn,
    pub min_cvar: RawMinCvar,
}

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
    /// Pack root, relative to the config file; default `out` beside the current folder.
    pub root: Option<PathBuf>,
}

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

/// The typesetter's budget for one PDF (`report.typeset_seconds`, `report.typeset_memory_mb`).
#[derive(Debug, Clone, Copy)]
pub struct TypesetBudget {
    pub seconds: u64,
    pub memory_mb: u64,
}

/// Allowed `report.typeset_seconds`: at least a second, at most an hour.
pub const TYPESET_SECONDS: std::ops::RangeInclusive<u64> = 1..=3600;
/// Allowed `report.typeset_memory_mb`: enough for the typesetter to start, at most 1 TiB.
pub const TYPESET_MEMORY_MB: std::ops::RangeInclusive<u64> = 256..=1_048_576;

/// A group limit with its members resolved later against the asset list.
#[derive(Debug, Clone, serde::Serialize)]
pub struct GroupSpec {
    pub name: String,
    pub selector: GroupSelector,
    pub min: f64,
    pub max: f64,
}

/// How a group's members are chosen.
#[derive(Debug, Clone, serde::Serialize)]
pub enum GroupSelector {
    Tag { column: String, value: String },
    Assets(Vec<String>),
}

/// A resolved CVaR cap rule.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub enum CapRule {
    Value(f64),
    TimesCurrent(f64),
    TimesMin(f64),
}

/// A resolved return floor rule.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub enum FloorRule {
    Value(f64),
    PlusCurrent(f64),
}

/// The validated config every later stage sees.
#[derive(Debug, Clone)]
pub struct Config {
    pub path: PathBuf,
    pub fund: RawFund,
    pub short_name: String,
    pub prices: PathBuf,
    pub layout: Layout,
    pub assets: PathBuf,
    pub holdings: Option<PathBuf>,
    pub quality: QualityOptions,
    pub scenarios: ScenarioOptions,
    pub levels: Vec<f64>,
    pub confidence: f64,
    pub default_min: f64,
    pub default_max: f64,
    pub exclude: Vec<String>,
    pub groups: Vec<GroupSpec>,
    pub turnover_max: Option<f64>,
    pub cap: CapRule,
    pub floor: FloorRule,
    pub backend: Backend,
    pub out_root: PathBuf,
    pub analysis: AnalysisOptions,
    pub stress_file: Option<PathBuf>,
    /// The stress file's shocks, read and checked (shape, ranges, unique names) when the config is loaded
    /// ([`load_all`]); checked against the data in `run::prepare_fund`.
    pub stress: Option<StressFile>,
    pub stress_loss_limit: Option<f64>,
    pub stress_windows: usize,
    /// Custom template folder (`report.templates`), resolved and checked to be a folder.
    pub templates: Option<PathBuf>,
    /// Time and memory the typesetter may use for one PDF.
    pub typeset: TypesetBudget,
    /// Required sign-off roles, in signing order.
    pub signoff: Vec<SignRole>,
}

/// A stress file: named instantaneous shocks.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct StressFile {
    pub shocks: Vec<ShockSpec>,
}

/// One named shock: a return per tag (`class:equity`) and/or per asset; an asset move beats a tag move.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct ShockSpec {
    pub name: String,
    #[serde(default)]
    pub description: String,
    pub moves: Vec<MoveSpec>,
}

/// One move of a shock: exactly one of `tag` or `asset`, and the instantaneous simple return.
#[derive(Debug, Deserialize, Clone)]
#[serde(deny_unknown_fields)]
pub struct MoveSpec {
    pub tag: Option<String>,
    pub asset: Option<String>,
    #[serde(rename = "return")]
    pub ret: f64,
}

/// Reads and checks a stress file: its size and text lengths, its shape and ranges, and that every shock
/// has a name of its own (asset and tag names are checked against the data in `run::prepare_fund`).
pub fn load_stress(path: &Path) -> Result<StressFile> {
    let text = read_yaml(path, "stress file")?;
    parse_stress(path, &text)
}

/// Parses and checks the text of a stress file; `path` names it in messages, which also give the line.
pub fn parse_stress(path: &Path, text: &str) -> Result<StressFile> {
    if let Some(why) = yaml::overlong_text(text) {
        return Err(Error::config(path, why));
    }
    let file: StressFile =
        serde_yaml_ng::from_str(text).map_err(|e| Error::config(path, describe_yaml_error(&e)))?;
    check_shocks(&file).map_err(|(key, why)| Error::config(path, at_key(text, &key, &why)))?;
    Ok(file)
}

fn check_shocks(file: &StressFile) -> std::result::Result<(), (String, String)> {
    for (i, s) in file.shocks.iter().enumerate() {
        let name = s.name.trim();
        if name.is_empty() {
            return Err((
                format!("shocks[{i}].name"),
                "is required (the shock's name, printed in the stress table)".into(),
            ));
        }
        if let Some(first) = file.shocks[..i].iter().position(|o| o.name.trim() == name) {
            return Err((
                format!("shocks[{i}].name"),
                format!(
                    "`{name}` is already the name of shocks[{first}]; give each shock a name of its own"
                ),
            ));
        }
        for (j, m) in s.moves.iter().enumerate() {
            check_move(m).map_err(|(k, why)| {
                (
                    format!("shocks[{i}].moves[{j}]{k}"),
                    format!("in shock `{name}`: {why}"),
                )
            })?;
        }
    }
    Ok(())
}

fn check_move(m: &MoveSpec) -> std::result::Result<(), (&'static str, String)> {
    if m.tag.is_some() == m.asset.is_some() {
        return Err(("", "give exactly one of `tag` or `asset`".into()));
    }
    if !(m.ret.is_finite() && m.ret >= -1.0) {
        return Err((
            ".return",
            format!("{} must be a simple return ≥ −1 (−100%)", m.ret),
        ));
    }
    if let Some(t) = &m.tag {
        check_tag(t).map_err(|why| (".tag", why))?;
    }
    if m.asset.as_ref().is_some_and(|a| a.trim().is_empty()) {
        return Err((".asset", "is blank; give an asset code".into()));
    }
    Ok(())
}

/// A `column:value` tag with neither part blank.
fn check_tag(t: &str) -> std::result::Result<(&str, &str), String> {
    match t.split_once(':') {
        Some((c, v)) if !c.trim().is_empty() && !v.trim().is_empty() => Ok((c.trim(), v.trim())),
        Some(_) => Err(format!(
            "`{t}` has a blank column or value; it must look like `column:value`, e.g. `class:equity`"
        )),
        None => Err(format!(
            "must look like `column:value`, e.g. `class:equity`, got `{t}`"
        )),
    }
}

/// "key (line L): why", with the line of the key in `text` when it is there, else "key: why".
fn at_key(text: &str, key: &str, why: &str) -> String {
    match yaml::locate(text, key).filter(|p| p.exact) {
        Some(p) => format!("{key} (line {}): {why}", p.line),
        None => format!("{key}: {why}"),
    }
}

/// Reads a config or stress file as text. A path that is not a regular file is refused by what it is,
/// without being opened (a named pipe would wait for a writer); so is a file over [`MAX_FILE_BYTES`],
/// after reading no more than that. The text must be UTF-8; a leading byte-order mark is dropped.
fn read_yaml(path: &Path, what: &str) -> Result<String> {
    if let Some(why) = crate::error::fs::not_a_file(path) {
        let hint = if why.starts_with("is ") {
            format!("the {what} must be a YAML file")
        } else {
            "check the path".to_string()
        };
        return Err(Error::config(path, format!("{why}; {hint}")));
    }
    let bytes = crate::error::fs::read_at_most(path, MAX_FILE_BYTES)?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(Error::config(path, too_large(what)));
    }
    let text = String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let line = e.as_bytes()[..at].iter().filter(|b| **b == b'\n').count() + 1;
        Error::config(
            path,
            format!("line {line}, byte {at}: not UTF-8 text; save the {what} as UTF-8"),
        )
    })?;
    Ok(match text.strip_prefix('\u{feff}') {
        Some(rest) => rest.to_string(),
        None => text,
    })
}

fn too_large(what: &str) -> String {
    format!(
        "is larger than {MAX_FILE_BYTES} bytes ({} MiB), the most a {what} may have; a {what} is a few KB of YAML, so this is not one",
        MAX_FILE_BYTES >> 20
    )
}

/// Every top-level and nested key, for suggestions on unknown keys.
const KNOWN_KEYS: &[&str] = &[
    "fund",
    "data",
    "quality",
    "scenarios",
    "risk",
    "limits",
    "models",
    "solver",
    "output",
    "name",
    "short_name",
    "prepared_for",
    "prepared_by",
    "prices",
    "layout",
    "assets",
    "holdings",
    "max_fill",
    "stale_run",
    "extreme_move",
    "min_obs_per_asset",
    "horizon",
    "step",
    "lookback_years",
    "half_life",
    "levels",
    "confidence",
    "default_min",
    "default_max",
    "exclude",
    "groups",
    "turnover_max",
    "tag",
    "min",
    "max",
    crate::models::Family::MaxReturn.name(),
    crate::models::Family::MinCvar.name(),
    "cvar_cap",
    "value",
    "times_current",
    "times_min",
    "return_floor",
    "plus_current",
    "backend",
    "root",
    "analysis",
    "stress",
    "frontier_points",
    "backtest_years",
    "daily_var_check",
    "file",
    "loss_limit",
    "historical_windows",
    "shocks",
    "description",
    "moves",
    "asset",
    "return",
    "report",
    "templates",
    "typeset_seconds",
    "typeset_memory_mb",
    "signoff",
    "roles",
    "role",
    "title",
    "keys",
    "funds",
];

/// Reads and validates a config file.
pub fn load(path: &Path) -> Result<Config> {
    let mut all = load_all(path)?;
    if all.len() > 1 {
        return Err(Error::config(
            path,
            format!(
                "lists {} funds; this command takes a single-fund config",
                all.len()
            ),
        ));
    }
    Ok(all.remove(0))
}

/// Reads a config and resolves one [`Config`] per fund (one for a single-fund config), with the shocks of
/// its stress file.
pub fn load_all(path: &Path) -> Result<Vec<Config>> {
    let text = read_yaml(path, "config")?;
    let raw = parse(path, &text)?;
    expand(path, &text, raw)
}

fn expand(path: &Path, text: &str, mut raw: RawConfig) -> Result<Vec<Config>> {
    let mandates = std::mem::take(&mut raw.funds);
    let mut configs: Vec<Config> = if mandates.is_empty() {
        vec![resolve_in(path, text, None, raw)?]
    } else {
        mandates
            .iter()
            .enumerate()
            .map(|(i, m)| resolve_in(path, text, Some(i), mandate(&raw, m)))
            .collect::<Result<_>>()?
    };
    for (i, c) in configs.iter().enumerate() {
        if configs[..i].iter().any(|o| o.short_name == c.short_name) {
            return Err(Error::config(
                path,
                format!(
                    "funds[{i}]: short name `{}` is used twice; give each fund its own fund.short_name",
                    c.short_name
                ),
            ));
        }
    }
    if let Some(file) = configs[0].stress_file.clone() {
        let stress = load_stress(&file)?;
        for c in &mut configs {
            c.stress = Some(stress.clone());
        }
    }
    Ok(configs)
}

/// The shared settings with one mandate's overrides (`raw` holds no `funds` any more).
fn mandate(raw: &RawConfig, m: &RawMandate) -> RawConfig {
    let mut one = raw.clone();
    one.fund = m.fund.clone();
    if m.holdings.is_some() {
        one.data.holdings = m.holdings.clone();
    }
    if let Some(l) = &m.limits {
        one.limits = l.clone();
    }
    if let Some(mo) = &m.models {
        one.models = mo.clone();
    }
    if let Some(so) = &m.signoff {
        one.signoff = so.clone();
    }
    one
}

/// Resolves one fund; messages give the line of the key: for fund `i` of a multi-fund config, the line of
/// its own override where it has one, else of the shared setting, and start with `funds[i]`.
fn resolve_in(path: &Path, text: &str, fund: Option<usize>, raw: RawConfig) -> Result<Config> {
    let resolved = resolve_at(path, raw, &|key| line_of(text, fund, key));
    match fund {
        None => resolved,
        Some(i) => resolved.map_err(|e| match e {
            Error::Config { path, message } => Error::Config {
                path,
                message: format!("funds[{i}]: {message}"),
            },
            other => other,
        }),
    }
}

/// The line of `key` in the config text: exact where the key is written, else the line of the longest
/// part of it that is (the `fund` section for a missing `fund.name`).
fn line_of(text: &str, fund: Option<usize>, key: &str) -> Option<usize> {
    let mut candidates = Vec::new();
    if let Some(i) = fund {
        candidates.push((format!("funds[{i}].{key}"), 3));
        if let Some(k) = key.strip_prefix("data.") {
            candidates.push((format!("funds[{i}].{k}"), 3));
        }
    }
    candidates.push((key.to_string(), 1));
    let places: Vec<yaml::Place> = candidates
        .iter()
        .filter_map(|(k, least)| yaml::locate(text, k).filter(|p| p.matched >= *least))
        .collect();
    places
        .iter()
        .find(|p| p.exact)
        .or_else(|| places.iter().max_by_key(|p| p.matched))
        .map(|p| p.line)
}

/// One fund of a (possibly multi-fund) config, by short name.
pub fn load_fund(path: &Path, short_name: Option<&str>) -> Result<Config> {
    let all = load_all(path)?;
    match short_name {
        None if all.len() == 1 => Ok(all.into_iter().next().expect("one")),
        None => Err(Error::config(
            path,
            "lists several funds; name one".to_string(),
        )),
        Some(n) => all
            .into_iter()
            .find(|c| c.short_name == n)
            .ok_or_else(|| Error::config(path, format!("has no fund `{n}`"))),
    }
}

/// Loads the config archived in a pack's `inputs/` folder, pointing every input at its archived copy
/// (`prices.*`, `assets.*`, `holdings.*`, `stress.yaml`, `templates/`) instead of the original paths.
pub fn load_archived(inputs: &Path) -> Result<Config> {
    let path = inputs.join("config.yaml");
    let text = read_yaml(&path, "config")?;
    let mut raw = parse(&path, &text)?;
    let find = |role: &str| -> Option<PathBuf> {
        let mut names: Vec<String> = std::fs::read_dir(inputs)
            .ok()?
            .filter_map(|e| e.ok())
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with(&format!("{role}.")))
            .collect();
        names.sort();
        names.into_iter().next().map(PathBuf::from)
    };
    raw.data.prices = find("prices");
    raw.data.assets = find("assets");
    raw.data.holdings = raw.data.holdings.and(find("holdings"));
    raw.stress.file = raw.stress.file.and(find("stress"));
    raw.report.templates = inputs
        .join("templates")
        .is_dir()
        .then(|| PathBuf::from("templates"));
    for m in &mut raw.funds {
        m.holdings = m.holdings.as_ref().and(find("holdings"));
    }
    let run: serde_json::Value = std::fs::read(inputs.join("run.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .unwrap_or_default();
    let wanted = run["fund"].as_str().map(str::to_string);
    let all = expand(&path, &text, raw)?;
    match wanted {
        Some(n) => all
            .into_iter()
            .find(|c| c.short_name == n)
            .ok_or_else(|| Error::config(&path, format!("has no fund `{n}`"))),
        None => all
            .into_iter()
            .next()
            .ok_or_else(|| Error::config(&path, "lists no fund")),
    }
}

/// Parses YAML text into the raw config, turning serde errors into messages with line and a suggestion.
/// Text over [`MAX_FILE_BYTES`], or with a text value longer than its bound ([`yaml`]), is refused first.
pub fn parse(path: &Path, text: &str) -> Result<RawConfig> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.trim().is_empty() {
        return Err(Error::config(
            path,
            "line 1: the file is empty; see config-demo/fund.yaml for a complete example",
        ));
    }
    if text.len() as u64 > MAX_FILE_BYTES {
        return Err(Error::config(path, too_large("config")));
    }
    if let Some(why) = yaml::overlong_text(text) {
        return Err(Error::config(path, why));
    }
    serde_yaml_ng::from_str::<RawConfig>(text)
        .map_err(|e| Error::config(path, describe_yaml_error(&e)))
}

fn describe_yaml_error(e: &serde_yaml_ng::Error) -> String {
    let msg = yaml::message(e);
    let Some(unknown) = between(&msg, "unknown field `", "`") else {
        return msg;
    };
    let expected: Vec<&str> = msg.split('`').skip(3).step_by(2).collect();
    let pool: Vec<&str> = if expected.is_empty() {
        KNOWN_KEYS.to_vec()
    } else {
        expected
    };
    match nearest(unknown, &pool) {
        Some(best) => format!("{msg}; did you mean `{best}`?"),
        None => msg,
    }
}

fn between<'a>(s: &'a str, start: &str, end: &str) -> Option<&'a str> {
    let from = s.find(start)? + start.len();
    let len = s[from..].find(end)?;
    Some(&s[from..from + len])
}

/// The candidate closest to `word` by edit distance, if it is close enough to be a plausible typo.
pub fn nearest<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let (best, dist) = candidates
        .iter()
        .map(|c| (*c, levenshtein(word, c)))
        .min_by_key(|(_, d)| *d)?;
    (dist <= word.len().max(3) / 2 + 1).then_some(best)
}

fn levenshtein(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = (prev + usize::from(ca != *cb)).min(row[j] + 1).min(cur + 1);
            prev = cur;
        }
    }
    row[b.len()]
}

/// Validates ranges and resolves paths; messages name the key. The config has no stress shocks yet
/// ([`load_all`] reads the stress file once for all funds).
pub fn resolve(path: &Path, raw: RawConfig) -> Result<Config> {
    resolve_at(path, raw, &|_| None)
}

/// [`resolve`], with messages that also give the line `line(key)` of the key.
fn resolve_at(path: &Path, raw: RawConfig, line: &dyn Fn(&str) -> Option<usize>) -> Result<Config> {
    let bad = |key: &str, why: String| {
        Error::config(
            path,
            match line(key) {
                Some(l) => format!("{key} (line {l}): {why}"),
                None => format!("{key}: {why}"),
            },
        )
    };
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let join = |p: &PathBuf| {
        if p.is_absolute() {
            p.clone()
        } else {
            base.join(p)
        }
    };
    if raw.fund.name.trim().is_empty() {
        return Err(bad(
            "fund.name",
            "is required (the fund's name, printed on every page)".into(),
        ));
    }
    let prices = raw
        .data
        .prices
        .as_ref()
        .ok_or_else(|| bad("data.prices", "is required (the price file)".into()))?;
    let assets = raw.data.assets.as_ref().ok_or_else(|| {
        bad(
            "data.assets",
            "is required (the asset metadata file)".into(),
        )
    })?;
    check_scenarios(&raw.scenarios).map_err(|(k, m)| bad(k, m))?;
    check_quality(&raw.quality).map_err(|(k, m)| bad(k, m))?;
    check_levels(&raw.risk).map_err(|(k, m)| bad(k, m))?;
    check_limits(&raw.limits, raw.data.holdings.is_some()).map_err(|(k, m)| bad(k, m))?;
    check_exclude(&raw.limits.exclude).map_err(|(k, m)| bad(&k, m))?;
    let groups = resolve_groups(&raw.limits.groups).map_err(|(k, m)| bad(&k, m))?;
    let cap = resolve_cap(&raw.models.max_return.cvar_cap)
        .map_err(|m| bad("models.max_return.cvar_cap", m))?;
    let floor = resolve_floor(&raw.models.min_cvar.return_floor)
        .map_err(|m| bad("models.min_cvar.return_floor", m))?;
    if raw.data.holdings.is_none() {
        if matches!(cap, CapRule::TimesCurrent(_)) {
            return Err(bad(
                "models.max_return.cvar_cap.times_current",
                NEEDS_HOLDINGS.into(),
            ));
        }
        if matches!(floor, FloorRule::PlusCurrent(_)) {
            return Err(bad(
                "models.min_cvar.return_floor.plus_current",
                NEEDS_HOLDINGS.into(),
            ));
        }
    }
    let short_name = match &raw.fund.short_name {
        Some(s) if !s.trim().is_empty() => slug(s),
        _ => slug(&raw.fund.name),
    };
    if short_name.is_empty() {
        return Err(bad(
            "fund.short_name",
            "must contain at least one letter or digit".into(),
        ));
    }
    check_analysis(&raw.analysis, &raw.stress).map_err(|(k, m)| bad(k, m))?;
    check_signoff(&raw.signoff).map_err(|(k, m)| bad(&k, m))?;
    check_report(&raw.report).map_err(|(k, m)| bad(k, m))?;
    for (key, file) in [
        ("data.prices", Some(prices)),
        ("data.assets", Some(assets)),
        ("data.holdings", raw.data.holdings.as_ref()),
        ("stress.file", raw.stress.file.as_ref()),
    ] {
        if let Some(f) = file {
            let full = join(f);
            if let Some(why) = crate::error::fs::not_a_file(&full) {
                return Err(bad(
                    key,
                    format!(
                        "{} {why} (paths are relative to the config file's folder)",
                        full.display()
                    ),
                ));
            }
        }
    }
    let out_root = raw
        .output
        .root
        .as_ref()
        .map(&join)
        .unwrap_or_else(|| PathBuf::from("out"));
    let templates = raw.report.templates.as_ref().map(&join);
    if let Some(t) = templates.as_ref().filter(|t| !t.is_dir()) {
        let what = match std::fs::metadata(t) {
            Ok(m) => format!("it is {}", crate::error::fs::kind_of(&m)),
            Err(_) => "it does not exist".to_string(),
        };
        return Err(bad(
            "report.templates",
            format!(
                "{} is not a folder ({what}; custom templates go in a folder whose files replace the built-in ones)",
                t.display()
            ),
        ));
    }
    Ok(Config {
        path: path.to_path_buf(),
        short_name,
        prices: join(prices),
        layout: raw.data.layout,
        assets: join(assets),
        holdings: raw.data.holdings.as_ref().map(&join),
        quality: raw.quality,
        scenarios: raw.scenarios,
        levels: sorted_levels(&raw.risk),
        confidence: raw.risk.confidence,
        default_min: raw.limits.default_min,
        default_max: raw.limits.default_max,
        exclude: raw.limits.exclude,
        groups,
        turnover_max: raw.limits.turnover_max,
        cap,
        floor,
        backend: raw.solver.backend,
        out_root,
        templates,
        typeset: TypesetBudget {
            seconds: raw.report.typeset_seconds,
            memory_mb: raw.report.typeset_memory_mb,
        },
        fund: raw.fund,
        analysis: raw.analysis,
        stress_file: raw.stress.file.as_ref().map(&join),
        stress: None,
        stress_loss_limit: raw.stress.loss_limit,
        stress_windows: raw.stress.historical_windows,
        signoff: raw.signoff.roles,
    })
}

const NEEDS_HOLDINGS: &str = "is relative to the current portfolio, but data.holdings is not set";

type KeyError = (&'static str, String);

fn check_scenarios(s: &ScenarioOptions) -> std::result::Result<(), KeyError> {
    if s.horizon == 0 || s.horizon > 260 {
        return Err((
            "scenarios.horizon",
            format!("must be between 1 and 260 observations, got {}", s.horizon),
        ));
    }
    if s.step == 0 {
        return Err(("scenarios.step", "must be at least 1".into()));
    }
    if s.lookback_years == 0 || s.lookback_years > 100 {
        return Err((
            "scenarios.lookback_years",
            format!("must be between 1 and 100, got {}", s.lookback_years),
        ));
    }
    match s.half_life {
        Some(h) if !(h.is_finite() && h > 0.0) => Err((
            "scenarios.half_life",
            format!("must be a positive number of observations, got {h}"),
        )),
        _ => Ok(()),
    }
}

fn check_signoff(s: &RawSignoff) -> std::result::Result<(), (String, String)> {
    for (i, r) in s.roles.iter().enumerate() {
        let key = |k: &str| format!("signoff.roles[{i}].{k}");
        if r.role.trim().is_empty() {
            return Err((
                key("role"),
                "is required (e.g. preparer, risk_reviewer, approver)".into(),
            ));
        }
        if r.title.as_ref().is_some_and(|t| t.trim().is_empty()) {
            return Err((
                key("title"),
                "is blank; leave it out to print the role's name".into(),
            ));
        }
        if s.roles.iter().filter(|o| o.role == r.role).count() > 1 {
            return Err((key("role"), format!("role `{}` is listed twice", r.role)));
        }
        if r.keys.is_empty() {
            return Err((
                key("keys"),
                format!(
                    "role `{}` needs at least one trusted public key (made by `tailpack keygen`)",
                    r.role
                ),
            ));
        }
        if let Some(k) = r
            .keys
            .iter()
            .find(|k| k.len() != 64 || !k.chars().all(|c| c.is_ascii_hexdigit()))
        {
            return Err((
                key("keys"),
                format!("`{k}` is not an Ed25519 public key (64 hex digits)"),
            ));
        }
    }
    Ok(())
}

fn check_report(r: &RawReport) -> std::result::Result<(), KeyError> {
    if !TYPESET_SECONDS.contains(&r.typeset_seconds) {
        return Err((
            "report.typeset_seconds",
            format!(
                "must be between {} and {} seconds, got {}",
                TYPESET_SECONDS.start(),
                TYPESET_SECONDS.end(),
                r.typeset_seconds
            ),
        ));
    }
    if !TYPESET_MEMORY_MB.contains(&r.typeset_memory_mb) {
        return Err((
            "report.typeset_memory_mb",
            format!(
                "must be between {} and {} MB, got {}",
                TYPESET_MEMORY_MB.start(),
                TYPESET_MEMORY_MB.end(),
                r.typeset_memory_mb
            ),
        ));
    }
    Ok(())
}

fn check_analysis(a: &AnalysisOptions, s: &RawStress) -> std::result::Result<(), KeyError> {
    if a.frontier_points < 2 || a.frontier_points > 500 {
        return Err((
            "analysis.frontier_points",
            format!("must be between 2 and 500, got {}", a.frontier_points),
        ));
    }
    if a.backtest_years > 50 {
        return Err((
            "analysis.backtest_years",
            format!("must be between 0 and 50, got {}", a.backtest_years),
        ));
    }
    if let Some(l) = s.loss_limit {
        if !(l.is_finite() && l > 0.0 && l <= 1.0) {
            return Err((
                "stress.loss_limit",
                format!("must be a loss fraction in (0, 1], got {l}"),
            ));
        }
    }
    if s.historical_windows > 20 {
        return Err((
            "stress.historical_windows",
            format!("must be between 0 and 20, got {}", s.historical_windows),
        ));
    }
    Ok(())
}

fn check_quality(q: &QualityOptions) -> std::result::Result<(), KeyError> {
    if !(q.extreme_move.is_finite() && q.extreme_move > 0.0) {
        return Err((
            "quality.extreme_move",
            format!("must be a positive return, got {}", q.extreme_move),
        ));
    }
    if q.stale_run < 2 {
        return Err((
            "quality.stale_run",
            format!("must be at least 2 observations, got {}", q.stale_run),
        ));
    }
    Ok(())
}

fn check_levels(r: &RawRisk) -> std::result::Result<(), KeyError> {
    let open_unit = |c: f64| c.is_finite() && c > 0.0 && c < 1.0;
    if !open_unit(r.confidence) {
        return Err((
            "risk.confidence",
            format!("must lie strictly between 0 and 1, got {}", r.confidence),
        ));
    }
    if let Some(c) = r.levels.iter().find(|c| !open_unit(**c)) {
        return Err((
            "risk.levels",
            format!("every level must lie strictly between 0 and 1, got {c}"),
        ));
    }
    Ok(())
}

fn sorted_levels(r: &RawRisk) -> Vec<f64> {
    let mut v = r.levels.clone();
    v.push(r.confidence);
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
}

fn check_limits(l: &RawLimits, has_holdings: bool) -> std::result::Result<(), KeyError> {
    if !(l.default_min.is_finite() && l.default_min >= 0.0) {
        return Err((
            "limits.default_min",
            format!("must be ≥ 0 (long-only), got {}", l.default_min),
        ));
    }
    if !(l.default_max.is_finite() && l.default_max >= l.default_min && l.default_max <= 1.0) {
        return Err((
            "limits.default_max",
            format!("must lie in [default_min, 1], got {}", l.default_max),
        ));
    }
    match l.turnover_max {
        Some(t) if !(t.is_finite() && (0.0..=2.0).contains(&t)) => Err((
            "limits.turnover_max",
            format!("must lie in [0, 2] (Σ|x − current|), got {t}"),
        )),
        Some(_) if !has_holdings => Err((
            "limits.turnover_max",
            "needs current holdings: set data.holdings".into(),
        )),
        _ => Ok(()),
    }
}

fn check_exclude(exclude: &[String]) -> std::result::Result<(), (String, String)> {
    match exclude.iter().position(|x| x.trim().is_empty()) {
        Some(j) => Err((
            format!("limits.exclude[{j}]"),
            "is blank; give an asset code".into(),
        )),
        None => Ok(()),
    }
}

fn resolve_groups(raw: &[RawGroup]) -> std::result::Result<Vec<GroupSpec>, (String, String)> {
    raw.iter()
        .enumerate()
        .map(|(i, g)| resolve_group(i, g))
        .collect()
}

fn resolve_group(i: usize, g: &RawGroup) -> std::result::Result<GroupSpec, (String, String)> {
    let key = |k: &str| format!("limits.groups[{i}].{k}");
    if g.name.trim().is_empty() {
        return Err((key("name"), "is required".into()));
    }
    let selector = match (&g.tag, &g.assets) {
        (Some(t), None) => {
            let (column, value) = check_tag(t).map_err(|why| (key("tag"), why))?;
            GroupSelector::Tag {
                column: column.to_string(),
                value: value.to_string(),
            }
        }
        (None, Some(a)) if !a.is_empty() => {
            if let Some(j) = a.iter().position(|x| x.trim().is_empty()) {
                return Err((
                    key(&format!("assets[{j}]")),
                    "is blank; give an asset code".into(),
                ));
            }
            GroupSelector::Assets(a.clone())
        }
        _ => {
            return Err((
                key("tag"),
                "give exactly one of `tag` or a non-empty `assets` list".into(),
            ));
        }
    };
    let (min, max) = (g.min.unwrap_or(0.0), g.max.unwrap_or(1.0));
    if !(min.is_finite() && max.is_finite() && 0.0 <= min && min <= max && max <= 1.0) {
        return Err((
            key("min"),
            format!("need 0 ≤ min ≤ max ≤ 1, got min {min}, max {max}"),
        ));
    }
    Ok(GroupSpec {
        name: g.name.clone(),
        selector,
        min,
        max,
    })
}

fn resolve_cap(c: &RawCap) -> std::result::Result<CapRule, String> {
    let rule = match (c.value, c.times_current, c.times_min) {
        (Some(v), None, None) => CapRule::Value(v),
        (None, Some(v), None) => CapRule::TimesCurrent(v),
        (None, None, Some(v)) => CapRule::TimesMin(v),
        _ => return Err("give exactly one of `value`, `times_current`, `times_min`".into()),
    };
    let (CapRule::Value(v) | CapRule::TimesCurrent(v) | CapRule::TimesMin(v)) = rule;
    if !v.is_finite()
        || (matches!(rule, CapRule::TimesMin(_)) && v < 1.0)
        || (!matches!(rule, CapRule::Value(_)) && v <= 0.0)
    {
        return Err(format!(
            "out of range: {v} (times_min must be ≥ 1, times_current > 0)"
        ));
    }
    Ok(rule)
}

fn resolve_floor(f: &RawFloor) -> std::result::Result<FloorRule, String> {
    match (f.value, f.plus_current) {
        (Some(v), None) if v.is_finite() => Ok(FloorRule::Value(v)),
        (None, Some(v)) if v.is_finite() => Ok(FloorRule::PlusCurrent(v)),
        _ => Err("give exactly one finite `value` or `plus_current`".into()),
    }
}

/// Folder-safe lower-case name: letters and digits kept, everything else becomes single dashes.
pub fn slug(s: &str) -> String {
    let mut out = String::new();
    for c in s.chars() {
        if c.is_ascii_alphanumeric() {
            out.push(c.to_ascii_lowercase());
        } else if !out.ends_with('-') && !out.is_empty() {
            out.push('-');
        }
    }
    out.trim_end_matches('-').to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggests_nearest_key() {
        assert_eq!(nearest("horizn", &["horizon", "step"]), Some("horizon"));
        assert_eq!(nearest("zzzzzzzzz", &["horizon", "step"]), None);
    }

    #[test]
    fn slug_is_folder_safe() {
        assert_eq!(
            slug("Orrin Hollow (fictional) Fund"),
            "orrin-hollow-fictional-fund"
        );
    }
}
