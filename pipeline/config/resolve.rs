//! Raw config → [`Config`]: required keys, the section checks of [`super::checks`], the input files of
//! the registry ([`super::inputs`]) resolved against the config file's folder and checked to be what they
//! must be, the command-line [`Overrides`], and the stress file read. Messages name the key and, where the
//! caller knows the text, its line.

use super::checks::{self, KeyError, PlaceError};
use super::inputs::{Input, raw_slot};
use super::raw::{DEFAULT_OUT_ROOT, RawConfig, RawFund};
use super::stress::{StressFile, load_stress};
use super::{
    CapRule, Config, CostRates, Currency, FloorRule, Fund, GroupSpec, Money, Overrides, Policy,
    TypesetBudget,
};
use crate::error::{Error, Result};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// What resolving one fund needs besides its raw config.
pub(super) struct Context<'a> {
    /// The config file, named in every message.
    pub path: &'a Path,
    pub overrides: &'a Overrides,
    /// The line of a key in the config text, where known.
    pub line: &'a dyn Fn(&str) -> Option<usize>,
    /// Reads the stress file (once for all funds of a config).
    pub stress: &'a dyn Fn(&Path) -> Result<StressFile>,
    /// For a config archived in a pack, the pack's `inputs/` folder: inputs are read from their archived
    /// copies there, whatever paths the config writes.
    pub archive: Option<&'a Path>,
}

impl Context<'_> {
    /// "key (line L): why" about the config file.
    fn bad(&self, key: &str, why: impl Into<String>) -> Error {
        let why = why.into();
        Error::config(
            self.path,
            match (self.line)(key) {
                Some(l) => format!("{key} (line {l}): {why}"),
                None => format!("{key}: {why}"),
            },
        )
    }

    fn key_error(&self, (key, why): KeyError) -> Error {
        self.bad(key, why)
    }

    fn place_error(&self, (key, why): PlaceError) -> Error {
        self.bad(&key, why)
    }

    /// A path of the config, relative to the config file's folder unless absolute.
    fn join(&self, p: &Path) -> PathBuf {
        let base = self.path.parent().unwrap_or(Path::new(""));
        if p.is_absolute() {
            p.to_path_buf()
        } else {
            base.join(p)
        }
    }
}

/// Validates ranges, resolves paths and reads the stress file; messages name the key.
pub fn resolve(path: &Path, raw: RawConfig) -> Result<Config> {
    resolve_with(path, raw, &Overrides::default())
}

/// [`resolve`] with command-line overrides.
pub fn resolve_with(path: &Path, raw: RawConfig, overrides: &Overrides) -> Result<Config> {
    let cx = Context {
        path,
        overrides,
        line: &|_| None,
        stress: &load_stress,
        archive: None,
    };
    resolve_at(&cx, raw)
}

/// The resolution of one fund, in the order its checks report: fund name, required inputs, sections,
/// limits and model rules, short name, analysis and sign-off, the input files, the stress file.
pub(super) fn resolve_at(cx: &Context, mut raw: RawConfig) -> Result<Config> {
    if raw.fund.name.trim().is_empty() {
        return Err(cx.bad(
            "fund.name",
            "is required (the fund's name, printed on every page)",
        ));
    }
    required_inputs(cx, &mut raw)?;
    check_sections(cx, &raw)?;
    let rules = rules(cx, &raw)?;
    let short_name = short_name(cx, &raw.fund)?;
    let money = checks::resolve_money(&raw.fund).map_err(|e| cx.key_error(e))?;
    let costs = checks::resolve_costs(&raw.costs).map_err(|e| cx.place_error(e))?;
    let currency =
        checks::resolve_currency(&raw.fund, &raw.currency).map_err(|e| cx.place_error(e))?;
    checks::check_analysis(&raw.analysis, &raw.stress).map_err(|e| cx.key_error(e))?;
    checks::check_signoff(&raw.signoff).map_err(|e| cx.place_error(e))?;
    checks::check_report(&raw.report).map_err(|e| cx.key_error(e))?;
    let inputs = input_paths(cx, &mut raw)?;
    let stress = match inputs.get(&Input::Stress) {
        Some(p) => Some((cx.stress)(p)?),
        None => None,
    };
    let money_and_costs = (money, costs, currency);
    Ok(assemble(
        cx,
        raw,
        short_name,
        rules,
        inputs,
        stress,
        money_and_costs,
    ))
}

/// Every required input is named.
fn required_inputs(cx: &Context, raw: &mut RawConfig) -> Result<()> {
    for &kind in Input::ALL {
        // With a scenario file the prices are optional (what needs them is then not run).
        let optional = kind == Input::Prices && raw.data.scenarios.is_some();
        if let (Some(what), Some(key)) = (kind.required(), kind.key())
            && !optional
            && raw_slot(kind, raw).is_none_or(|p| p.is_none())
        {
            return Err(cx.bad(key, format!("is required ({what})")));
        }
    }
    Ok(())
}

/// Scenarios, quality, risk levels and limits.
fn check_sections(cx: &Context, raw: &RawConfig) -> Result<()> {
    checks::check_scenarios(&raw.scenarios).map_err(|e| cx.key_error(e))?;
    checks::check_geltner(&raw.scenarios).map_err(|e| cx.place_error(e))?;
    checks::check_quality(&raw.quality).map_err(|e| cx.key_error(e))?;
    checks::check_levels(&raw.risk).map_err(|e| cx.key_error(e))?;
    checks::check_limits(&raw.limits, raw.data.holdings.is_some()).map_err(|e| cx.key_error(e))?;
    checks::check_exclude(&raw.limits.exclude).map_err(|e| cx.place_error(e))?;
    checks::check_skip_columns(&raw.data.skip_columns).map_err(|e| cx.place_error(e))
}

/// The group limits, the CVaR cap, the return floor and the policy portfolio.
struct Rules {
    groups: Vec<GroupSpec>,
    cap: CapRule,
    floor: FloorRule,
    policy: Option<Policy>,
    liabilities: Option<super::Liabilities>,
    basis: super::Basis,
}

const NEEDS_HOLDINGS: &str = "is relative to the current portfolio, but data.holdings is not set";

fn rules(cx: &Context, raw: &RawConfig) -> Result<Rules> {
    let groups = checks::resolve_groups(&raw.limits.groups).map_err(|e| cx.place_error(e))?;
    let cap = checks::resolve_cap(&raw.models.max_return.cvar_cap)
        .map_err(|m| cx.bad("models.max_return.cvar_cap", m))?;
    let floor = checks::resolve_floor(&raw.models.min_cvar.return_floor)
        .map_err(|m| cx.bad("models.min_cvar.return_floor", m))?;
    if raw.data.holdings.is_none() {
        if matches!(cap, CapRule::TimesCurrent(_)) {
            return Err(cx.bad("models.max_return.cvar_cap.times_current", NEEDS_HOLDINGS));
        }
        if matches!(floor, FloorRule::PlusCurrent(_)) {
            return Err(cx.bad("models.min_cvar.return_floor.plus_current", NEEDS_HOLDINGS));
        }
    }
    let policy = raw
        .policy
        .as_ref()
        .map(super::policy::resolve_policy)
        .transpose()
        .map_err(|e| cx.place_error(e))?;
    let (liabilities, basis) = super::liabilities::resolve(raw).map_err(|e| cx.key_error(e))?;
    Ok(Rules {
        groups,
        cap,
        floor,
        policy,
        liabilities,
        basis,
    })
}

/// `fund.short_name` made folder-safe, or the fund's name made so.
fn short_name(cx: &Context, fund: &RawFund) -> Result<String> {
    let short_name = match &fund.short_name {
        Some(s) if !s.trim().is_empty() => slug(s),
        _ => slug(&fund.name),
    };
    if short_name.is_empty() {
        return Err(cx.bad(
            "fund.short_name",
            "must contain at least one letter or digit",
        ));
    }
    Ok(short_name)
}

/// Every input the config names, resolved ([`source`]) and checked to be a file or folder as the registry
/// says, in registry order.
fn input_paths(cx: &Context, raw: &mut RawConfig) -> Result<BTreeMap<Input, PathBuf>> {
    let mut out = BTreeMap::new();
    for &kind in Input::ALL {
        let Some(key) = kind.key() else {
            continue;
        };
        let written = raw_slot(kind, raw).and_then(|s| s.clone());
        let Some(full) = source(cx, kind, written.as_deref()) else {
            continue;
        };
        if let Some(why) = kind.unusable(&full) {
            return Err(cx.bad(key, why));
        }
        out.insert(kind, full);
    }
    Ok(out)
}

/// Where an input is read from: the path the config writes, against the config's folder; for an archived
/// config, the archived copy of every input the config names and of every input the archive always holds.
fn source(cx: &Context, kind: Input, written: Option<&Path>) -> Option<PathBuf> {
    let copy = match cx.archive {
        Some(dir) if written.is_some() || kind.always_archived() => {
            kind.find_archived(dir).map(|name| dir.join(name))
        }
        _ => None,
    };
    copy.or_else(|| written.map(|w| cx.join(w)))
}

/// The resolved config, every override applied.
fn assemble(
    cx: &Context,
    raw: RawConfig,
    short_name: String,
    rules: Rules,
    mut inputs: BTreeMap<Input, PathBuf>,
    stress: Option<StressFile>,
    (money, costs, currency): (Option<Money>, CostRates, Currency),
) -> Config {
    let mut input = |k: Input| inputs.remove(&k);
    let out_root = out_root(cx, raw.output.root.as_deref());
    Config {
        path: cx.path.to_path_buf(),
        fund: Fund {
            name: raw.fund.name,
            prepared_for: raw.fund.prepared_for,
            prepared_by: raw.fund.prepared_by,
            money,
        },
        short_name,
        as_of: cx.overrides.as_of,
        prices: input(Input::Prices),
        layout: raw.data.layout,
        assets: input(Input::Assets).expect("checked to be named"),
        holdings: input(Input::Holdings),
        fx: input(Input::Fx),
        skip_columns: raw.data.skip_columns,
        scenario_file: input(Input::Scenarios),
        scenario_name: file_name(raw.data.scenarios.as_deref()),
        currency,
        quality: raw.quality,
        scenarios: raw.scenarios,
        levels: sorted_levels(&raw.risk),
        confidence: raw.risk.confidence,
        default_min: raw.limits.default_min,
        default_max: raw.limits.default_max,
        exclude: raw.limits.exclude,
        groups: rules.groups,
        turnover_max: raw.limits.turnover_max,
        policy: rules.policy,
        cap: rules.cap,
        floor: rules.floor,
        costs,
        backend: cx.overrides.backend.unwrap_or(raw.solver.backend),
        out_root,
        analysis: raw.analysis,
        stress_file: input(Input::Stress),
        stress_name: file_name(raw.stress.file.as_deref()),
        stress,
        stress_loss_limit: raw.stress.loss_limit,
        stress_windows: raw.stress.historical_windows,
        templates: input(Input::Templates),
        typeset: TypesetBudget {
            seconds: raw.report.typeset_seconds,
            memory_mb: raw.report.typeset_memory_mb,
        },
        signoff: raw.signoff.roles,
        liabilities: rules.liabilities,
        basis: rules.basis,
    }
}

/// The last part of a configured path, as text (the stress file's name in the pack).
fn file_name(path: Option<&Path>) -> Option<String> {
    path.and_then(|p| p.file_name())
        .map(|n| n.to_string_lossy().into_owned())
}

/// The archive root: `--out`, else `output.root` relative to the config, else the default.
fn out_root(cx: &Context, root: Option<&std::path::Path>) -> PathBuf {
    match (&cx.overrides.out, root) {
        (Some(out), _) => out.clone(),
        (None, Some(root)) => cx.join(root),
        (None, None) => PathBuf::from(DEFAULT_OUT_ROOT),
    }
}

/// The reported levels: the configured ones and the models' confidence, ascending, each once.
fn sorted_levels(r: &super::raw::RawRisk) -> Vec<f64> {
    let mut v = r.levels.clone();
    v.push(r.confidence);
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
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
    fn slug_is_folder_safe() {
        assert_eq!(
            slug("Orrin Hollow (fictional) Fund"),
            "orrin-hollow-fictional-fund"
        );
    }
}
