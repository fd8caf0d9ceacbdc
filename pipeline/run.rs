//! The run: config → ingest → scenarios → models → risk profiles → pack, as one library call per command.
//!
//! This module wires the stages together and resolves the rules that depend on earlier results (the CVaR
//! cap "times the minimum", the return floor "plus current"). It computes nothing itself beyond that.

use crate::analysis::stress::{self, Shock};
use crate::config::{self, Backend, Config, GroupSelector};
use crate::diag::{Check, Level};
use crate::error::{Error, Result};
use crate::ingest::{self, MarketData};
use crate::models::{
    self, Emptiness, Family, FeasibleSet, Group, Outcome, Preconditions, Problem, Status, lp,
};
use crate::risk::{self, RiskProfile};
use crate::scenarios::{self, ScenarioSet};

/// The command line's settings of a run or check: overrides of the config, applied when it is loaded, and
/// how long to wait for the archive lock.
#[derive(Debug, Clone)]
pub struct RunOptions {
    pub overrides: config::Overrides,
    /// How long to wait for another run's archive lock.
    pub lock_timeout: std::time::Duration,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            overrides: config::Overrides::default(),
            lock_timeout: crate::archive::LOCK_TIMEOUT,
        }
    }
}

/// Every scenario return must be finite and within ±[`scenarios::MAX_ABS_RETURN`]; ingest's price-range
/// check ensures it, and this names the cell should anything get past it: a data error, never a model
/// diagnosis.
fn usable_returns(cfg: &Config, set: &ScenarioSet) -> Result<()> {
    let Some((k, i, r)) = set.unusable_return() else {
        return Ok(());
    };
    Err(Error::data(
        &cfg.prices,
        format!(
            "column `{}`: the return over scenario {} (prices dated {} and {}) is {r:e}, beyond ±{:e}; the prices on those dates are not a usable price series: check those cells",
            set.assets[i],
            set.label(k),
            set.starts[k],
            set.ends[k],
            scenarios::MAX_ABS_RETURN
        ),
    ))
}

/// A model's outcome with the risk profile of its portfolio.
#[derive(Debug, Clone)]
pub struct ModelReport {
    pub family: Family,
    /// The family's serialised name (`family.name()`).
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

/// One fund after everything `run` checks before its first LP: the config (command-line overrides applied
/// when it was loaded), the loaded and checked data, the scenarios, the feasible set (groups, bounds, exclusions resolved) and
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
    prepare_fund(config::load(config_path, &opts.overrides)?)
}

/// Loads one fund's data and runs every check that needs no LP ([`validate`]): the one step both `run`
/// and `check` take, so they refuse the same inputs with the same exit codes.
pub fn prepare_fund(cfg: Config) -> Result<Prepared> {
    let data = crate::timings::time("ingest", || ingest::load(&cfg))?;
    validate(cfg, data)
}

/// The checks after ingest: scenarios, the feasible set, the stress shocks against the data.
pub fn validate(cfg: Config, data: MarketData) -> Result<Prepared> {
    let scenarios = crate::timings::time("scenarios", || scenarios::build(&data, &cfg.scenarios))?;
    usable_returns(&cfg, &scenarios)?;
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
    let aux = match &empty {
        Emptiness::NotEmpty => Aux {
            min_cvar: p.min_cvar(None).map(|s| s.objective),
            max_return: p.max_return(None).map(|s| s.objective),
        },
        Emptiness::Empty(_) | Emptiness::Unknown(_) => Aux::unsolved(),
    };
    let pre = match &empty {
        Emptiness::NotEmpty => models::preconditions(&aux.min_cvar, &aux.max_return),
        other => models::preconditions_without_portfolio(other),
    };
    let min_over_x = aux.min_cvar.as_ref().ok().copied();
    let cap = models::resolve_cap(cfg.cap, min_over_x, current.as_ref().map(|r| r.at(c).cvar));
    let floor = models::resolve_floor(cfg.floor, current.as_ref().map(|r| r.expected_return));
    let reports = solve_models(&p, &pre, (cap, floor), &empty, &aux, &data, &cfg);
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

/// The two auxiliary LPs over X: minimum CVaR and maximum expected return (or why each has no optimum).
struct Aux {
    min_cvar: Result<f64, lp::Failure>,
    max_return: Result<f64, lp::Failure>,
}

impl Aux {
    /// Not solved, because X is empty or has no known portfolio.
    fn unsolved() -> Aux {
        let not = || {
            Err(lp::Failure::Solver(
                "not solved: the feasible set has no known portfolio".into(),
            ))
        };
        Aux {
            min_cvar: not(),
            max_return: not(),
        }
    }
}

/// The three models, each with an outcome whose message claims only what was established: a feasible set
/// called empty only when it was shown empty, a cap or floor called out of reach only against a solved
/// auxiliary LP, and a solver's "infeasible" that a known portfolio contradicts reported as a solver error.
fn solve_models(
    p: &Problem,
    pre: &Preconditions,
    (cap, floor): (f64, f64),
    empty: &Emptiness,
    aux: &Aux,
    data: &MarketData,
    cfg: &Config,
) -> Vec<ModelReport> {
    let outcomes = match empty {
        Emptiness::Empty(why) => Family::ALL.map(|f| {
            Outcome::failed(
                Status::Infeasible,
                format!("{}: the feasible set is empty: {why}", f.name()),
            )
        }),
        Emptiness::Unknown(why) => Family::ALL.map(|_| {
            Outcome::failed(
                Status::SolverError,
                format!("{why}; whether any portfolio meets the limits is not established, so no model was solved"),
            )
        }),
        Emptiness::NotEmpty => [
            max_return_model(p, cap, &aux.min_cvar, cfg),
            min_cvar_model(p, floor, &aux.max_return),
            max_ratio_model(p, pre),
        ],
    };
    outcomes
        .into_iter()
        .zip(Family::ALL)
        .map(|(o, family)| report(family, o, p, data, cfg))
        .collect()
}

/// max_return under the resolved cap. A cap that could not be resolved (its base is unknown) is said so
/// rather than handed to the solver as NaN.
fn max_return_model(
    p: &Problem,
    cap: f64,
    min_x: &Result<f64, lp::Failure>,
    cfg: &Config,
) -> Outcome {
    if cap.is_nan() {
        let base = match (cfg.cap, min_x) {
            (config::CapRule::TimesMin(_), Err(f)) => format!(
                "it is a multiple of the minimum CVaR over the feasible set, and that LP ended without an optimum ({})",
                models::failure_words(f)
            ),
            _ => "its base (the minimum CVaR over the feasible set or the current portfolio's CVaR) is not known".into(),
        };
        return Outcome::failed(
            Status::SolverError,
            format!(
                "models.max_return.cvar_cap could not be resolved: {base}; the model was not solved"
            ),
        );
    }
    let o = models::outcome(
        p,
        p.max_return(Some(cap)),
        Some(cap),
        None,
        || match min_x {
            Ok(m) if cap < *m => format!(
                "models.max_return.cvar_cap: the CVaR cap {cap:.6} is below the minimum attainable CVaR {m:.6} over the feasible set; raise the cap"
            ),
            Ok(_) => format!(
                "the solver reports the CVaR cap {cap:.6} infeasible together with the feasible set"
            ),
            Err(f) => format!(
                "the solver reports the CVaR cap {cap:.6} infeasible together with the feasible set; the minimum CVaR over the feasible set is not known ({}), so whether the cap is below it is not established",
                models::failure_words(f)
            ),
        },
    );
    let witness = min_x.as_ref().ok().filter(|m| cap >= **m).map(|m| {
        format!("the minimum-CVaR portfolio of the feasible set has CVaR {m:.6} ≤ the cap {cap:.6}")
    });
    models::unless_contradicted(o, witness)
}

/// min_cvar above the resolved return floor, diagnosed against the maximum expected return over X.
fn min_cvar_model(p: &Problem, floor: f64, max_x: &Result<f64, lp::Failure>) -> Outcome {
    let o = models::outcome(
        p,
        p.min_cvar(Some(floor)),
        None,
        Some(floor),
        || match max_x {
            Ok(m) if floor > *m => format!(
                "models.min_cvar.return_floor: the return floor {floor:.6} is above the best attainable expected return {m:.6} over the feasible set; lower the floor"
            ),
            Ok(_) => format!(
                "the solver reports the return floor {floor:.6} infeasible together with the feasible set"
            ),
            Err(f) => format!(
                "the solver reports the return floor {floor:.6} infeasible together with the feasible set; the best attainable expected return is not known ({}), so whether the floor is above it is not established",
                models::failure_words(f)
            ),
        },
    );
    let witness = max_x.as_ref().ok().filter(|m| floor <= **m).map(|m| {
        format!("the maximum-return portfolio of the feasible set has expected return {m:.6} ≥ the floor {floor:.6}")
    });
    models::unless_contradicted(o, witness)
}

/// max_ratio: not applicable when a precondition is shown to fail, a solver error when the preconditions
/// could not be established, else the Charnes–Cooper LP — whose set is never empty when they hold.
fn max_ratio_model(p: &Problem, pre: &Preconditions) -> Outcome {
    if !pre.holds {
        let status = if pre.established {
            Status::NotApplicable
        } else {
            Status::SolverError
        };
        return Outcome::failed(status, pre.reason.clone().unwrap_or_default());
    }
    let solved = match pre.min_cvar {
        Some(m) => p.max_ratio_knowing(m),
        None => p.max_ratio(),
    };
    let o = models::outcome(p, solved, None, None, String::new);
    models::unless_contradicted(
        o,
        Some("the feasible set is not empty and CVaR > 0 on it, so any of its portfolios scaled by t = 1/CVaR satisfies the scaled LP".into()),
    )
}

fn report(
    family: Family,
    mut outcome: Outcome,
    p: &Problem,
    data: &MarketData,
    cfg: &Config,
) -> ModelReport {
    let profile = outcome
        .weights
        .as_ref()
        .map(|w| risk::profile(p.set, w, &cfg.levels, cfg.confidence));
    if family == Family::MaxRatio {
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
        family,
        name: family.name(),
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
