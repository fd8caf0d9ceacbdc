//! The run: config → ingest → scenarios → models → risk profiles → pack, as one library call per command.
//!
//! This module wires the stages together and resolves the rules that depend on earlier results (the CVaR
//! cap "times the minimum", the return floor "plus current"). It computes nothing itself beyond that.

use crate::analysis::stress::{self, Shock};
use crate::config::{self, Backend, Config, GroupSelector};
use crate::diag::{Check, Level};
use crate::error::{Error, Result};
use crate::ingest::{self, MarketData};
use crate::models::{self, FeasibleSet, Group, Outcome, Preconditions, Problem, Status, lp};
use crate::risk::{self, RiskProfile};
use crate::scenarios::{self, ScenarioSet};
use chrono::NaiveDate;
use std::path::PathBuf;

/// Command-line overrides of the config.
#[derive(Debug, Clone)]
pub struct RunOptions {
    pub as_of: Option<NaiveDate>,
    pub out: Option<PathBuf>,
    pub backend: Option<Backend>,
    /// How long to wait for another run's archive lock.
    pub lock_timeout: std::time::Duration,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            as_of: None,
            out: None,
            backend: None,
            lock_timeout: crate::archive::LOCK_TIMEOUT,
        }
    }
}

/// The names of the three model families, in report order.
pub const MODEL_NAMES: [&str; 3] = ["max_return", "min_cvar", "max_ratio"];

/// A model's outcome with the risk profile of its portfolio.
#[derive(Debug, Clone)]
pub struct ModelReport {
    pub name: &'static str,
    pub outcome: Outcome,
    pub profile: Option<RiskProfile>,
    pub turnover: Option<f64>,
    /// Assets at their upper / lower bound (lower only when that bound is positive).
    pub at_upper: Vec<String>,
    pub at_lower: Vec<String>,
}

/// Everything one run computed; the pack writer serialises it.
#[derive(Debug, Clone)]
pub struct RunResult {
    pub config: Config,
    pub data: MarketData,
    pub scenarios: ScenarioSet,
    pub feasible: FeasibleSet,
    pub cvar_cap: f64,
    pub return_floor: f64,
    pub preconditions: Preconditions,
    pub current: Option<RiskProfile>,
    pub models: Vec<ModelReport>,
    pub checks: Vec<Check>,
    pub backend: Backend,
    pub analysis: crate::analysis::Analysis,
}

/// One fund after everything `run` checks before its first LP: the config with the command-line overrides,
/// the loaded and checked data, the scenarios, the feasible set (groups, bounds, exclusions resolved) and
/// the stress file's shocks resolved against the assets. `check` stops here; `run` solves from here.
#[derive(Debug, Clone)]
pub struct Prepared {
    pub cfg: Config,
    pub data: MarketData,
    pub scenarios: ScenarioSet,
    pub feasible: FeasibleSet,
    /// The stress file's shocks (none without a stress file), in file order.
    pub shocks: Vec<Shock>,
}

/// Loads a single-fund config and prepares it ([`prepare_fund`]).
pub fn prepare(config_path: &std::path::Path, opts: &RunOptions) -> Result<Prepared> {
    prepare_fund(config::load(config_path)?, opts)
}

/// Applies the command-line overrides to one fund's config, loads its data and runs every check that
/// needs no LP ([`validate`]): the one step both `run` and `check` take, so they refuse the same inputs
/// with the same exit codes.
pub fn prepare_fund(mut cfg: Config, opts: &RunOptions) -> Result<Prepared> {
    if let Some(out) = &opts.out {
        cfg.out_root = out.clone();
    }
    if let Some(b) = opts.backend {
        cfg.backend = b;
    }
    let data = crate::timings::time("ingest", || ingest::load(&cfg, opts.as_of))?;
    validate(cfg, data)
}

/// The checks after ingest: scenarios, the feasible set, the stress shocks against the data.
pub fn validate(cfg: Config, data: MarketData) -> Result<Prepared> {
    let scenarios = crate::timings::time("scenarios", || scenarios::build(&data, &cfg.scenarios))?;
    let feasible = feasible_set(&cfg, &data)?;
    let shocks = match (&cfg.stress_file, &cfg.stress) {
        (Some(path), Some(file)) => stress::defined(path, file, &data)?,
        _ => vec![],
    };
    Ok(Prepared {
        cfg,
        data,
        scenarios,
        feasible,
        shocks,
    })
}

/// Builds the feasible set X from config, metadata and holdings.
pub fn feasible_set(cfg: &Config, data: &MarketData) -> Result<FeasibleSet> {
    let n = data.assets.len();
    let mut lower: Vec<f64> = data
        .meta
        .iter()
        .map(|m| m.min_weight.unwrap_or(cfg.default_min))
        .collect();
    let mut upper: Vec<f64> = data
        .meta
        .iter()
        .map(|m| m.max_weight.unwrap_or(cfg.default_max))
        .collect();
    for (i, a) in data.assets.iter().enumerate() {
        if cfg.exclude.contains(a) {
            lower[i] = 0.0;
            upper[i] = 0.0;
        }
    }
    let groups = cfg
        .groups
        .iter()
        .map(|g| resolve_group(cfg, data, g))
        .collect::<Result<Vec<_>>>()?;
    debug_assert_eq!(lower.len(), n);
    Ok(FeasibleSet {
        lower,
        upper,
        groups,
        turnover_max: cfg.turnover_max,
        current: data.holdings.clone(),
    })
}

fn resolve_group(cfg: &Config, data: &MarketData, g: &config::GroupSpec) -> Result<Group> {
    let members: Vec<usize> = match &g.selector {
        GroupSelector::Tag { column, value } => {
            let col = column.to_ascii_lowercase();
            if data.meta.first().is_some_and(|m| m.tag(&col).is_none()) {
                return Err(Error::config(
                    &cfg.path,
                    format!(
                        "limits.groups `{}`: the asset metadata has no column `{column}`",
                        g.name
                    ),
                ));
            }
            (0..data.assets.len())
                .filter(|&i| {
                    data.meta[i]
                        .tag(&col)
                        .is_some_and(|v| v.eq_ignore_ascii_case(value))
                })
                .collect()
        }
        GroupSelector::Assets(list) => list
            .iter()
            .map(|a| {
                data.assets.iter().position(|x| x == a).ok_or_else(|| {
                    let names: Vec<&str> = data.assets.iter().map(String::as_str).collect();
                    let hint = config::nearest(a, &names)
                        .map(|n| format!("; did you mean `{n}`?"))
                        .unwrap_or_default();
                    Error::config(
                        &cfg.path,
                        format!("limits.groups `{}`: unknown asset `{a}`{hint}", g.name),
                    )
                })
            })
            .collect::<Result<_>>()?,
    };
    if members.is_empty() {
        return Err(Error::config(
            &cfg.path,
            format!("limits.groups `{}`: selects no asset", g.name),
        ));
    }
    Ok(Group {
        name: g.name.clone(),
        members,
        min: g.min,
        max: g.max,
    })
}

/// Checks and solves everything for loaded data ([`validate`], then [`solve`]).
pub fn compute(cfg: Config, data: MarketData) -> Result<RunResult> {
    solve(validate(cfg, data)?)
}

/// Solves the models, frontier, stress set and backtest of a prepared fund.
pub fn solve(prepared: Prepared) -> Result<RunResult> {
    let Prepared {
        cfg,
        data,
        scenarios: set,
        feasible: fs,
        shocks,
    } = prepared;
    let models_start = std::time::Instant::now();
    let c = cfg.confidence;
    let p = Problem {
        set: &set,
        mu: set.mean(),
        confidence: c,
        feasible: &fs,
        backend: cfg.backend,
    };
    let current = data
        .holdings
        .as_ref()
        .map(|h| risk::profile(&set, h, &cfg.levels, c));
    let empty = models::explain_empty(&fs, &data.assets, cfg.backend);
    let (min_over_x, max_over_x) = match &empty {
        Some(_) => (None, None),
        None => (
            p.min_cvar(None).ok().map(|s| s.objective),
            p.max_return(None).ok().map(|s| s.objective),
        ),
    };
    let pre = models::preconditions(min_over_x, max_over_x);
    let cap = models::resolve_cap(cfg.cap, min_over_x, current.as_ref().map(|r| r.at(c).cvar));
    let floor = models::resolve_floor(cfg.floor, current.as_ref().map(|r| r.expected_return));
    let reports = solve_models(
        &p,
        &pre,
        cap,
        floor,
        empty.as_deref(),
        min_over_x,
        max_over_x,
        &data,
        &cfg,
    );
    crate::timings::add("models", models_start.elapsed());
    let mut portfolios: Vec<(String, Vec<f64>)> = data
        .holdings
        .iter()
        .map(|h| ("current".to_string(), h.clone()))
        .collect();
    portfolios.extend(
        reports
            .iter()
            .filter_map(|r| r.outcome.weights.clone().map(|w| (r.name.to_string(), w))),
    );
    let analysis = crate::analysis::analyse(&cfg, &data, &p, &fs, &portfolios, shocks);
    let mut checks = data.quality.findings.clone();
    checks.extend(model_checks(&pre, &reports, &cfg));
    checks.extend(crate::analysis::checks(&analysis, &cfg));
    let backend = cfg.backend;
    Ok(RunResult {
        config: cfg,
        data,
        scenarios: set,
        feasible: fs,
        cvar_cap: cap,
        return_floor: floor,
        preconditions: pre,
        current,
        models: reports,
        checks,
        backend,
        analysis,
    })
}

#[allow(clippy::too_many_arguments)]
fn solve_models(
    p: &Problem,
    pre: &Preconditions,
    cap: f64,
    floor: f64,
    empty: Option<&str>,
    min_x: Option<f64>,
    max_x: Option<f64>,
    data: &MarketData,
    cfg: &Config,
) -> Vec<ModelReport> {
    let infeasible_x = |what: &str| Outcome {
        status: Status::Infeasible,
        message: Some(format!(
            "{what}: the feasible set is empty: {}",
            empty.unwrap_or("")
        )),
        weights: None,
        objective: None,
        scale: None,
        max_violation: None,
    };
    let max_return = if empty.is_some() {
        infeasible_x("max_return")
    } else {
        models::outcome(
            p,
            p.max_return(Some(cap)),
            Some(cap),
            None,
            || match min_x {
                Some(m) if cap < m => format!(
                    "models.max_return.cvar_cap: the CVaR cap {cap:.6} is below the minimum attainable CVaR {m:.6} over the feasible set; raise the cap"
                ),
                _ => format!("the CVaR cap {cap:.6} cannot be met together with the feasible set"),
            },
        )
    };
    let min_cvar = if empty.is_some() {
        infeasible_x("min_cvar")
    } else {
        models::outcome(
            p,
            p.min_cvar(Some(floor)),
            None,
            Some(floor),
            || match max_x {
                Some(m) if floor > m => format!(
                    "models.min_cvar.return_floor: the return floor {floor:.6} is above the best attainable expected return {m:.6} over the feasible set; lower the floor"
                ),
                _ => format!(
                    "the return floor {floor:.6} cannot be met together with the feasible set"
                ),
            },
        )
    };
    let max_ratio = if empty.is_some() {
        infeasible_x("max_ratio")
    } else if !pre.holds {
        Outcome {
            status: Status::NotApplicable,
            message: pre.reason.clone(),
            weights: None,
            objective: None,
            scale: None,
            max_violation: None,
        }
    } else {
        let solved = match pre.min_cvar {
            Some(m) => p.max_ratio_knowing(m),
            None => p.max_ratio(),
        };
        models::outcome(p, solved, None, None, || {
            "the scaled feasible set is empty".into()
        })
    };
    [max_return, min_cvar, max_ratio]
        .into_iter()
        .zip(MODEL_NAMES)
        .map(|(o, name)| report(name, o, p, data, cfg))
        .collect()
}

fn report(
    name: &'static str,
    mut outcome: Outcome,
    p: &Problem,
    data: &MarketData,
    cfg: &Config,
) -> ModelReport {
    let profile = outcome
        .weights
        .as_ref()
        .map(|w| risk::profile(p.set, w, &cfg.levels, cfg.confidence));
    if name == "max_ratio" {
        if let (Some(pr), Some(_)) = (&profile, outcome.objective) {
            outcome.objective = Some(pr.expected_return / pr.at(cfg.confidence).cvar);
        }
    }
    let turnover = match (&outcome.weights, &data.holdings) {
        (Some(w), Some(h)) => Some(models::turnover(w, h)),
        _ => None,
    };
    let bound = |pick: &dyn Fn(usize, f64) -> bool| -> Vec<String> {
        outcome.weights.as_ref().map_or(vec![], |w| {
            (0..w.len())
                .filter(|&i| pick(i, w[i]))
                .map(|i| data.assets[i].clone())
                .collect()
        })
    };
    let at_upper = bound(&|i, w| p.feasible.upper[i] > 0.0 && w >= p.feasible.upper[i] - 1e-9);
    let at_lower = bound(&|i, w| p.feasible.lower[i] > 0.0 && w <= p.feasible.lower[i] + 1e-9);
    ModelReport {
        name,
        outcome,
        profile,
        turnover,
        at_upper,
        at_lower,
    }
}

fn model_checks(pre: &Preconditions, reports: &[ModelReport], cfg: &Config) -> Vec<Check> {
    let mut out = Vec::new();
    let fmt = |v: Option<f64>| v.map_or("n/a".to_string(), |x| format!("{x:.6}"));
    let level = |ok: bool| if ok { Level::Pass } else { Level::Warn };
    out.push(Check::new("max_ratio.cvar_positive", level(pre.min_cvar.is_some_and(|m| m > 0.0)),
        format!("Charnes–Cooper precondition: minimum CVaR {:.1}% over the feasible set = {} (must be > 0)", cfg.confidence * 100.0, fmt(pre.min_cvar))));
    out.push(Check::new("max_ratio.return_positive", level(pre.max_return.is_some_and(|m| m > 0.0)),
        format!("Charnes–Cooper precondition: maximum expected return over the feasible set = {} (must be > 0)", fmt(pre.max_return))));
    for r in reports {
        let o = &r.outcome;
        let lvl = match o.status {
            Status::Optimal if o.message.is_none() => Level::Pass,
            Status::SolverError => Level::Fail,
            _ => Level::Warn,
        };
        let mut msg = format!("{}: {}", r.name, o.status.word());
        if let Some(v) = o.max_violation {
            msg.push_str(&format!(
                "; largest constraint violation after solve {v:.1e}"
            ));
        }
        if let Some(m) = &o.message {
            msg.push_str(&format!("; {m}"));
        }
        out.push(Check::new(format!("{}.status", r.name), lvl, msg));
        if let Some(pr) = &r.profile {
            out.push(concentration(
                r.name,
                pr.effective_holdings,
                r.at_upper.len(),
            ));
        }
    }
    out.push(Check::pass(
        "solver.tolerance",
        format!(
            "{}; feasibility tolerance {:e}; post-solve check tolerance {:e}",
            lp::backend_description(cfg.backend),
            tolerance(cfg.backend),
            models::FEASIBILITY_TOLERANCE
        ),
    ));
    out
}

/// Rule of thumb (common practice): fewer than 5 effective holdings is a concentrated portfolio.
fn concentration(name: &str, eff: f64, at_upper: usize) -> Check {
    let msg = format!(
        "{name}: effective number of holdings 1/Σw² = {eff:.1}; {at_upper} asset(s) at their upper bound"
    );
    if eff < 5.0 {
        Check::warn(
            format!("{name}.concentration"),
            format!("{msg} (below 5: concentrated)"),
        )
    } else {
        Check::pass(format!("{name}.concentration"), msg)
    }
}

fn tolerance(b: Backend) -> f64 {
    match b {
        Backend::Highs => lp::HIGHS_TOLERANCE,
        Backend::Clarabel => lp::CLARABEL_TOLERANCE,
    }
}
