//! The run: config → ingest → scenarios → models → risk profiles → pack, as one library call per command.
//!
//! This module wires the stages together and resolves the rules that depend on earlier results (the CVaR
//! cap "times the minimum", the return floor "plus current"). It computes nothing itself beyond that.

use crate::analysis::stress::{self, Shock};
use crate::config::{self, Backend, Config};
use crate::diag::{Check, Level};
use crate::error::{Error, Result};
use crate::ingest::{self, MarketData};
use crate::models::{
    self, ActiveBudget, Family, FeasibleSet, Outcome, Preconditions, Premises, Problem, Status,
    Targets, lp,
};
use crate::risk::{self, RiskProfile};
use crate::scenarios::{self, ScenarioSet};

/// Every scenario return must be finite and within ±[`scenarios::MAX_ABS_RETURN`]; ingest's price-range
/// check ensures it, and this names the cell should anything get past it: a data error, never a model
/// diagnosis.
fn usable_returns(cfg: &Config, set: &ScenarioSet) -> Result<()> {
    let Some((k, i, r)) = set.unusable_return() else {
        return Ok(());
    };
    Err(Error::data(
        cfg.price_file(),
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
    /// The one-way cost of moving from the current holdings to the portfolio, as a fraction of the fund's
    /// value (0 without holdings or cost rates; `None` without a portfolio).
    pub cost: Option<f64>,
    /// Expected return net of that cost (`None` without a portfolio).
    pub expected_return_net: Option<f64>,
    /// The trades from the current holdings to the portfolio, in asset order (`None` without a portfolio
    /// or without current holdings).
    pub trades: Option<Vec<Trade>>,
    /// Assets at their upper / lower bound (lower only when that bound is positive).
    pub at_upper: Vec<String>,
    pub at_lower: Vec<String>,
}

/// One asset bought or sold on the way from the current holdings to a model's portfolio.
#[derive(Debug, Clone, PartialEq)]
pub struct Trade {
    /// The asset's index in the universe.
    pub asset: usize,
    /// The weight change x − current, a fraction of the fund's value (positive: bought).
    pub change: f64,
    /// The amount bought (positive) or sold (negative) in the base currency, value × change; `None`
    /// without a fund value (`fund.value`).
    pub amount: Option<f64>,
}

/// The trades from `current` to `x` ([`models::trades`]: weight changes above round-off), each sized in
/// money when the fund's value is known.
fn trade_list(current: &[f64], x: &[f64], money: Option<&config::Money>) -> Vec<Trade> {
    models::trades(current, x)
        .into_iter()
        .map(|(asset, change)| Trade {
            asset,
            change,
            amount: money.map(|m| m.value * change),
        })
        .collect()
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
    /// The scenario returns of the policy's non-investable benchmark series (no columns without them).
    pub reference: ScenarioSet,
    /// Every portfolio against the policy, when one is configured.
    pub policy: Option<crate::analysis::policy::PolicyReport>,
    /// Every portfolio against the liabilities, when they are configured.
    pub liabilities: Option<crate::analysis::liabilities::LiabilityReport>,
    /// The fund's earlier packs as the archive found them (none for a first pack): what results.json's
    /// `change` compares with.
    pub past: crate::analysis::change::Past,
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
    /// The scenario returns of the policy's non-investable benchmark series, rows as in `scenarios`.
    pub reference: ScenarioSet,
    /// The members (asset indices) of every policy line, in line order; empty without a policy.
    pub policy_members: Vec<Vec<usize>>,
}

/// Loads a single-fund config with the command line's overrides and prepares it ([`prepare_fund`]).
pub fn prepare(config_path: &std::path::Path, overrides: &config::Overrides) -> Result<Prepared> {
    prepare_fund(config::load(config_path, overrides)?)
}

/// Loads one fund's data and runs every check that needs no LP ([`validate`]): the one step both `run`
/// and `check` take, so they refuse the same inputs with the same exit codes.
pub fn prepare_fund(cfg: Config) -> Result<Prepared> {
    let data = crate::timings::time("ingest", || ingest::load(&cfg))?;
    validate(cfg, data)
}

/// The checks after ingest: scenarios, the feasible set, the stress shocks against the data.
pub fn validate(cfg: Config, data: MarketData) -> Result<Prepared> {
    let (scenarios, reference) = crate::timings::time("scenarios", || scenario_sets(&cfg, &data))?;
    let policy_members = models::policy_lines(&cfg, &data)?;
    let feasible = models::feasible_set(&cfg, &data)?;
    let shocks = match (&cfg.stress_file, &cfg.stress) {
        (Some(path), Some(file)) => stress::defined(path, file, &data, cfg.liabilities.as_ref())?,
        _ => vec![],
    };
    Ok(Prepared {
        cfg,
        data,
        scenarios,
        feasible,
        shocks,
        reference,
        policy_members,
    })
}

/// The universe's and the reference series' scenario sets: read from the scenario file when the config
/// names one (ingest checked every cell), else cut from the price history and checked here.
fn scenario_sets(cfg: &Config, data: &MarketData) -> Result<(ScenarioSet, ScenarioSet)> {
    if let Some(path) = &cfg.scenario_file {
        let table = ingest::scenario_file::read(path, &wanted(cfg, data))?;
        return Ok(scenarios::from_file(
            table,
            &data.assets,
            &data.reference,
            &cfg.scenarios,
        ));
    }
    let scenarios = scenarios::build(data, &cfg.scenarios)?;
    usable_returns(cfg, &scenarios)?;
    let reference = scenarios::reference(data, &cfg.scenarios)?;
    usable_returns(cfg, &reference)?;
    Ok((scenarios, reference))
}

/// The columns a scenario file must have: the universe, the non-investable series, and the asset file's
/// assets the price fill policy dropped (their columns are passed over).
fn wanted<'a>(cfg: &'a Config, data: &'a MarketData) -> ingest::scenario_file::Wanted<'a> {
    ingest::scenario_file::Wanted {
        assets: &data.assets,
        reference: &data.reference,
        other_assets: &data.dropped_assets,
        asset_file: &cfg.assets,
        min_scenarios: min_scenarios(cfg),
    }
}

/// A scenario file needs at least [`ingest::MIN_SCENARIOS`] scenarios, and at every reported level at
/// least one scenario's worth of probability beyond the quantile (S·(1 − α) ≥ 1 with equal
/// probabilities), or VaR and CVaR at that level are both the single worst scenario.
fn min_scenarios(cfg: &Config) -> (usize, String) {
    let top = cfg.levels.iter().copied().fold(cfg.confidence, f64::max);
    let needed = ((1.0 / (1.0 - top)) - 1e-9).ceil() as usize;
    (
        needed.max(ingest::MIN_SCENARIOS),
        format!(
            "{} at least, and 1/(1 − α) for the highest level α = {top} of risk.confidence and risk.levels, so that the tail beyond VaR holds at least one scenario",
            ingest::MIN_SCENARIOS
        ),
    )
}

/// Checks and solves everything for loaded data ([`validate`], then [`solve`]).
pub fn compute(cfg: Config, data: MarketData, seed: u64) -> Result<RunResult> {
    solve(validate(cfg, data)?, seed)
}

/// [`compute`] against the fund's earlier packs (`past`, found and verified by the archive layer).
pub fn compute_after(
    cfg: Config,
    data: MarketData,
    seed: u64,
    past: crate::analysis::change::Past,
) -> Result<RunResult> {
    solve_after(validate(cfg, data)?, seed, past)
}

/// Solves the models, frontier, stress set, backtest and bands of a prepared fund; `seed` seeds the bands'
/// resamples (the run takes it from the pack id, so a re-run draws the same ones). Nothing earlier is
/// compared with: a first pack ([`solve_after`] takes the earlier packs).
pub fn solve(prepared: Prepared, seed: u64) -> Result<RunResult> {
    solve_after(prepared, seed, crate::analysis::change::Past::default())
}

/// [`solve`] against the fund's earlier packs: `past` is what the archive layer found and verified (the
/// change since the previous pack is computed from it when the pack's results are written, and its check
/// joins the run's checks here).
pub fn solve_after(
    prepared: Prepared,
    seed: u64,
    past: crate::analysis::change::Past,
) -> Result<RunResult> {
    let Prepared {
        cfg,
        data,
        scenarios: set,
        feasible: fs,
        shocks,
        reference,
        policy_members,
    } = prepared;
    let models_start = std::time::Instant::now();
    let basis = crate::analysis::liabilities::basis_set(&cfg, &set, &reference);
    let model_set = basis.as_ref().map_or(&set, |(s, _)| s);
    let offsets = basis.as_ref().map(|(_, c)| c.as_slice());
    let benchmark = active_benchmark(&cfg, &set, &reference, offsets);
    let p = Problem {
        set: model_set,
        mu: model_set.mean(),
        confidence: cfg.confidence,
        feasible: &fs,
        backend: cfg.backend,
        active: benchmark.as_ref().map(|(b, budget)| ActiveBudget {
            benchmark: b,
            budget: *budget,
        }),
    };
    // One set of LPs for the models and the frontier: with cutting planes the frontier starts from every
    // cut the models needed.
    let mut lps = p.lps(p.method());
    let solved = solve_models(&mut lps, &cfg, &data);
    crate::timings::add("models", models_start.elapsed());
    let portfolios = named_portfolios(&data, &solved.reports);
    let analysis = crate::analysis::analyse(&cfg, &data, &mut lps, &fs, &portfolios, shocks, seed);
    let policy = crate::analysis::policy::report(
        &cfg,
        &data,
        &set,
        &reference,
        &policy_members,
        &portfolios,
    );
    let liabilities = crate::analysis::liabilities::report(
        &cfg,
        &data,
        (&set, &reference),
        &portfolios,
        &analysis.shocks,
    );
    let checks = run_checks(
        &cfg,
        (&data, &set),
        &solved,
        &analysis,
        (policy.as_ref(), liabilities.as_ref()),
        &past,
    );
    let backend = cfg.backend;
    Ok(RunResult {
        config: cfg,
        data,
        scenarios: set,
        feasible: fs,
        cvar_cap: solved.cap,
        return_floor: solved.floor,
        preconditions: solved.preconditions,
        current: solved.current,
        models: solved.reports,
        checks,
        backend,
        analysis,
        reference,
        policy,
        liabilities,
        past,
    })
}

/// Every check of the run, in the order the pack lists them: data quality, models, analysis, policy, the
/// active-CVaR budget, the earlier packs.
fn run_checks(
    cfg: &Config,
    (data, set): (&MarketData, &ScenarioSet),
    solved: &Solved,
    analysis: &crate::analysis::Analysis,
    (policy, liabilities): (
        Option<&crate::analysis::policy::PolicyReport>,
        Option<&crate::analysis::liabilities::LiabilityReport>,
    ),
    past: &crate::analysis::change::Past,
) -> Vec<Check> {
    let mut checks = data.quality.findings.clone();
    checks.extend(source_check(cfg, set));
    checks.extend(model_checks(&solved.preconditions, &solved.reports, cfg));
    checks.extend(crate::analysis::checks(analysis, cfg));
    checks.extend(crate::analysis::policy::checks(policy));
    checks.extend(active_budget_check(cfg, policy));
    checks.extend(crate::analysis::change::checks(past));
    checks.extend(crate::analysis::liabilities::checks(liabilities, cfg));
    checks
}

/// With a scenario file, where the scenarios come from and what needs the price history (skipped, or
/// run on the prices given beside the file).
fn source_check(cfg: &Config, set: &ScenarioSet) -> Option<Check> {
    if !set.from_file() {
        return None;
    }
    let prices = cfg.prices.is_some();
    let (never, with_prices): (Vec<_>, Vec<_>) = crate::analysis::NEEDS_HISTORY
        .iter()
        .partition(|(_, runs)| !runs);
    let names = |v: &[&(&str, bool)]| v.iter().map(|(w, _)| *w).collect::<Vec<_>>().join(", ");
    Some(Check::pass(
        "scenarios.source",
        format!(
            "{} scenarios of {} assets from the scenario file {} (data.scenarios), {}; not run on them: {}; {}: {}",
            set.len(),
            set.width(),
            cfg.scenario_name.as_deref().unwrap_or(""),
            if set.equal_probabilities {
                "equal probabilities"
            } else {
                "probabilities from the file"
            },
            names(&never),
            if prices {
                "from the price file"
            } else {
                "not run either without a price file (data.prices)"
            },
            names(&with_prices)
        ),
    ))
}

/// The policy benchmark's return per scenario with the active-CVaR budget, when the policy sets one
/// (`policy.active_cvar_budget`): what the models keep their active CVaR against; on the surplus basis
/// less the liabilities' part of each scenario (`offsets`), like the models' scenario set.
fn active_benchmark(
    cfg: &Config,
    set: &ScenarioSet,
    reference: &ScenarioSet,
    offsets: Option<&[f64]>,
) -> Option<(Vec<f64>, f64)> {
    let policy = cfg.policy.as_ref()?;
    let budget = policy.active_cvar_budget?;
    let b = scenarios::policy_benchmark(set, reference, policy);
    Some((
        crate::analysis::liabilities::benchmark_on_basis(b, offsets),
        budget,
    ))
}

/// With an active-CVaR budget, a check naming it, each model's active CVaR against it (`binding` within
/// 1e-6) and that the backtest's monthly models keep it too.
fn active_budget_check(
    cfg: &Config,
    policy: Option<&crate::analysis::policy::PolicyReport>,
) -> Option<Check> {
    let budget = cfg.policy.as_ref()?.active_cvar_budget?;
    let c = cfg.confidence;
    let models: Vec<String> = policy?
        .positions
        .iter()
        .filter(|x| x.portfolio != "current")
        .map(|x| {
            let a = x.active.at(c).cvar;
            let binding = if a >= budget - 1e-6 { " (binding)" } else { "" };
            format!("{} {:.2}%{binding}", x.portfolio, a * 100.0)
        })
        .collect();
    let each = if models.is_empty() {
        "no model has a portfolio".to_string()
    } else {
        format!("active CVaR {}", models.join(", "))
    };
    Some(Check::pass(
        "policy.active_cvar_budget",
        format!(
            "active-CVaR budget {:.2}% (policy.active_cvar_budget): the models keep their {:.1}% active CVaR against the policy benchmark at or below it; {each}; the walk-forward backtest's monthly models and the bands' resamples keep it too, each against the benchmark on its own scenarios",
            budget * 100.0,
            c * 100.0
        ),
    ))
}

/// What the models stage hands on: the current portfolio's profile, the resolved cap and floor, the ratio's
/// preconditions and every family's report.
struct Solved {
    current: Option<RiskProfile>,
    cap: f64,
    floor: f64,
    preconditions: Preconditions,
    reports: Vec<ModelReport>,
}

/// The models stage: every family solved on the fund's problem ([`models::solve_all`]), the rules "times
/// current" and "plus current" against the fund's holdings, each portfolio with its risk profile.
fn solve_models(lps: &mut models::Lps, cfg: &Config, data: &MarketData) -> Solved {
    let p = lps.problem();
    let current = data
        .holdings
        .as_ref()
        .map(|h| risk::profile(p.set, h, &cfg.levels, cfg.confidence));
    let targets = Targets {
        cap: cfg.cap,
        floor: cfg.floor,
        current: current.as_ref(),
    };
    let solution = models::solve_all_on(lps, &targets, Premises::Establish);
    let reports = solution
        .families
        .into_iter()
        .map(|f| report(f.family, on_basis(cfg, f.outcome), p, data, cfg))
        .collect();
    Solved {
        current,
        cap: solution.cap,
        floor: solution.floor,
        preconditions: solution.preconditions,
        reports,
    }
}

/// A `not_applicable` outcome on the surplus basis, with what that means for a fund with liabilities.
fn on_basis(cfg: &Config, mut o: Outcome) -> Outcome {
    if cfg.basis == config::Basis::Surplus && o.status == Status::NotApplicable {
        let m = surplus_words(cfg, &o.message.take().unwrap_or_default());
        o.message = Some(format!(
            "{m}; {}",
            crate::analysis::liabilities::RATIO_ON_SURPLUS
        ));
    }
    o
}

/// The precondition sentences of the models on the surplus basis name what they measure there: the
/// minimum surplus CVaR and the maximum expected surplus return over the feasible set.
fn surplus_words(cfg: &Config, text: &str) -> String {
    match cfg.basis {
        config::Basis::Assets => text.to_string(),
        config::Basis::Surplus => text
            .replace("minimum CVaR", "minimum surplus CVaR")
            .replace("maximum expected return", "maximum expected surplus return"),
    }
}

/// The portfolios the analysis compares, by name: the current holdings (when given), then each family's.
fn named_portfolios(data: &MarketData, reports: &[ModelReport]) -> Vec<(String, Vec<f64>)> {
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
    portfolios
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
    let cost = outcome
        .weights
        .as_ref()
        .map(|w| models::cost(p.feasible, w));
    let expected_return_net = profile
        .as_ref()
        .zip(cost)
        .map(|(pr, c)| pr.expected_return - c);
    if let (Some(pr), Some(lp), Some(net)) = (&profile, outcome.objective, expected_return_net) {
        let cvar = pr.at(cfg.confidence).cvar;
        outcome.objective = Some(family.reported_objective(lp, net, cvar));
    }
    let turnover = match (&outcome.weights, &data.holdings) {
        (Some(w), Some(h)) => Some(models::turnover(w, h)),
        _ => None,
    };
    let trades = match (&outcome.weights, &data.holdings) {
        (Some(w), Some(h)) => Some(trade_list(h, w, cfg.fund.money.as_ref())),
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
        cost,
        expected_return_net,
        trades,
        at_upper,
        at_lower,
    }
}

fn model_checks(pre: &Preconditions, reports: &[ModelReport], cfg: &Config) -> Vec<Check> {
    let mut out: Vec<Check> = pre
        .checks(cfg.confidence)
        .into_iter()
        .map(|mut c| {
            c.message = surplus_words(cfg, &c.message);
            c
        })
        .collect();
    out.extend(money_checks(cfg));
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

/// What the pack says about money and costs: the note that money figures are not shown without
/// `fund.value`, and how transaction costs entered the models (or why they did not).
fn money_checks(cfg: &Config) -> Vec<Check> {
    let mut out = Vec::new();
    if cfg.fund.money.is_none() {
        out.push(Check::pass(
            "fund.value",
            "no fund value configured (fund.value, fund.base_currency): weights and costs are shown as fractions of the fund's value; trade amounts in money are not shown",
        ));
    }
    if cfg.costs.any() {
        out.push(if cfg.holdings.is_none() {
            Check::warn(
                "costs.no_holdings",
                "cost rates are configured but there are no current holdings (data.holdings): costs are charged on trades from the current holdings, so none is charged and the models' returns are gross",
            )
        } else {
            Check::pass(
                "costs.net",
                "the models work net of one-way transaction costs: expected return minus Σ rate × |weight − current weight| (costs section)",
            )
        });
    }
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
