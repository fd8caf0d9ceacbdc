//! Solving every family on a price history other than the run's own — a backtest month's window or a
//! bootstrap resample — exactly as the run does: scenarios built by the run's rule, the same feasible set,
//! cap and floor rules (the "current" ones against the fund's holdings on these scenarios), the policy's
//! active-CVaR budget against the policy benchmark on these scenarios, the models' basis (on the surplus
//! basis the liability proxy's returns on these scenarios, over today's funded ratio), and
//! [`models::solve_all`]. The scenario set returned is the one the models worked on.

use crate::config::{Basis, Config};
use crate::ingest::MarketData;
use crate::models::{self, ActiveBudget, FeasibleSet, Premises, Problem, Solution, Targets};
use crate::risk;
use crate::scenarios::{self, ScenarioSet};
use chrono::NaiveDate;

/// Dated prices to solve on: the universe's (`prices[asset][row]`) and the policy's non-investable
/// series' (`reference[series][row]`, in `data.reference` order), with the feasible set to use.
pub struct History<'a> {
    pub dates: &'a [NaiveDate],
    pub prices: &'a [Vec<f64>],
    pub reference: &'a [Vec<f64>],
    pub feasible: &'a FeasibleSet,
}

/// The scenarios of `h` and every family solved on them under `premises` (what is known of X before
/// solving); an error in words when no scenario set can be built (too few scenarios, a benchmark series
/// without prices).
pub fn solve(
    cfg: &Config,
    data: &MarketData,
    h: &History,
    premises: Premises,
) -> Result<(ScenarioSet, Solution), String> {
    let set = scenarios::from_prices(&data.assets, h.dates, h.prices, &cfg.scenarios)
        .map_err(|e| e.to_string())?;
    if set.len() < crate::ingest::MIN_SCENARIOS {
        return Err(format!("only {} scenarios", set.len()));
    }
    let basis = surplus_basis(cfg, data, h, &set)?;
    let benchmark = budget_benchmark(cfg, data, h, &set)?.map(|(b, budget)| {
        let c = basis.as_ref().map(|(_, c)| c.as_slice());
        (super::liabilities::benchmark_on_basis(b, c), budget)
    });
    let set = basis.map_or(set, |(s, _)| s);
    let c = cfg.confidence;
    let p = Problem {
        set: &set,
        mu: set.mean(),
        confidence: c,
        feasible: h.feasible,
        backend: cfg.backend,
        active: benchmark.as_ref().map(|(b, budget)| ActiveBudget {
            benchmark: b,
            budget: *budget,
        }),
    };
    let current = data
        .holdings
        .as_ref()
        .map(|w| risk::profile(&set, w, &[c], c));
    let targets = Targets {
        cap: cfg.cap,
        floor: cfg.floor,
        current: current.as_ref(),
    };
    let solution = models::solve_all(&p, &targets, premises);
    Ok((set, solution))
}

/// With an active-CVaR budget, the policy benchmark's return in every scenario of `set` and the budget.
fn budget_benchmark(
    cfg: &Config,
    data: &MarketData,
    h: &History,
    set: &ScenarioSet,
) -> Result<Option<(Vec<f64>, f64)>, String> {
    let Some((policy, budget)) = cfg
        .policy
        .as_ref()
        .and_then(|p| p.active_cvar_budget.map(|b| (p, b)))
    else {
        return Ok(None);
    };
    if let Some(j) = h
        .reference
        .iter()
        .position(|p| p.iter().any(|v| !v.is_finite()))
    {
        return Err(format!(
            "benchmark series `{}` has no price somewhere in the window, so the active-CVaR budget cannot be applied",
            data.reference[j]
        ));
    }
    let reference = scenarios::from_prices(&data.reference, h.dates, h.reference, &cfg.scenarios)
        .map_err(|e| e.to_string())?;
    Ok(Some((
        scenarios::policy_benchmark(set, &reference, policy),
        budget,
    )))
}

/// On the surplus basis, the scenario set of `set` less the liabilities' part of each scenario, measured
/// by the proxy's prices in `h` ([`super::liabilities::basis_set`]), and that part; `None` on the assets
/// basis.
fn surplus_basis(
    cfg: &Config,
    data: &MarketData,
    h: &History,
    set: &ScenarioSet,
) -> Result<Option<(ScenarioSet, Vec<f64>)>, String> {
    let Some(l) = cfg
        .liabilities
        .as_ref()
        .filter(|_| cfg.basis == Basis::Surplus)
    else {
        return Ok(None);
    };
    let j = data
        .reference
        .iter()
        .position(|s| *s == l.proxy)
        .ok_or("the liability proxy is not among the reference series")?;
    if h.reference[j].iter().any(|v| !v.is_finite()) {
        return Err(format!(
            "liability proxy `{}` has no price somewhere in the window, so the surplus basis cannot be applied",
            l.proxy
        ));
    }
    let proxy = scenarios::from_prices(
        std::slice::from_ref(&l.proxy),
        h.dates,
        std::slice::from_ref(&h.reference[j]),
        &cfg.scenarios,
    )
    .map_err(|e| e.to_string())?;
    Ok(super::liabilities::basis_set(cfg, set, &proxy))
}
