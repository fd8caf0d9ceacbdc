//! Stage 8, pack: writes a run's results into its pack folder — `scenarios.csv` (and
//! `reference-scenarios.csv` when the policy names non-investable benchmark series), `results.json`,
//! `weights.csv`, `pack.pdf` (typeset by the report stage), `summary.txt` — and prints the summary.
//!
//! The folder layout is a contract read by outside checkers (README, "The pack folder"). Every output is
//! made in memory first (the PDF typeset under its budget); the folder is then written under a hidden
//! temporary name (`.partial-*`) beside its final place and renamed into place only when complete, so a
//! failed run leaves no partial pack behind, and a killed one only a hidden folder the next run removes.

use crate::csv_out;
use crate::error::{Result, fs};
use crate::models::{Family, Status};
use crate::run::{ModelReport, RunResult};
use crate::timings;
use serde_json::{Map, Value, json};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// `scenarios.csv`: `scenario[,probability],<assets…>`, one row per scenario, round-trip f64 text; text
/// fields quoted per RFC 4180 ([`csv_out`]).
pub fn scenarios_csv(r: &RunResult) -> String {
    let s = &r.scenarios;
    scenario_table(s, !s.equal_probabilities)
}

/// A scenario set as CSV: `scenario[,probability],<column…>`, one row per scenario labelled `start/end`,
/// values as round-trip f64 text.
fn scenario_table(s: &crate::scenarios::ScenarioSet, probabilities: bool) -> String {
    let mut out = String::with_capacity(s.len() * s.width() * 22);
    out.push_str("scenario");
    if probabilities {
        out.push_str(",probability");
    }
    for a in &s.assets {
        out.push(',');
        out.push_str(&csv_out::field(a));
    }
    out.push('\n');
    for k in 0..s.len() {
        out.push_str(&csv_out::field(&s.label(k)));
        if probabilities {
            let _ = write!(out, ",{:?}", s.probabilities[k]);
        }
        for v in s.row(k) {
            let _ = write!(out, ",{v:?}");
        }
        out.push('\n');
    }
    out
}

/// `reference-scenarios.csv`: `scenario,<series…>`, the scenario returns of the policy's non-investable
/// benchmark series, rows in the order of `scenarios.csv` (same labels, round-trip f64 text); `None` when
/// the policy names no such series.
pub fn reference_scenarios_csv(r: &RunResult) -> Option<String> {
    let s = &r.reference;
    (s.width() > 0).then(|| scenario_table(s, false))
}

/// `weights.csv`: one row per asset; columns current (if any) and each model (blank when not optimal);
/// asset codes and classes quoted per RFC 4180 ([`csv_out`]).
pub fn weights_csv(r: &RunResult) -> String {
    let mut out = String::from("asset,class");
    if r.data.holdings.is_some() {
        out.push_str(",current");
    }
    for m in &r.models {
        let _ = write!(out, ",{}", csv_out::field(m.name));
    }
    out.push('\n');
    for (i, a) in r.data.assets.iter().enumerate() {
        out.push_str(&csv_out::row([a.as_str(), &r.data.meta[i].class]));
        if let Some(h) = &r.data.holdings {
            let _ = write!(out, ",{:?}", h[i]);
        }
        for m in &r.models {
            match &m.outcome.weights {
                Some(w) => {
                    let _ = write!(out, ",{:?}", w[i]);
                }
                None => out.push(','),
            }
        }
        out.push('\n');
    }
    out
}

fn weight_map(assets: &[String], w: &[f64]) -> Value {
    Value::Object(
        assets
            .iter()
            .zip(w)
            .map(|(a, x)| (a.clone(), json!(x)))
            .collect(),
    )
}

/// Per asset its currency (the base currency's code, or null without one) and hedge ratio; the rate
/// differentials; every portfolio's exposure per foreign currency before and after hedging and its CVaR
/// with and without currency moves (`analysis::currency`).
fn currency_json(r: &RunResult) -> Value {
    let cur = &r.data.currency;
    let base = r.config.currency.base.as_deref();
    let per_asset: Vec<Value> = r
        .data
        .assets
        .iter()
        .enumerate()
        .map(|(i, a)| {
            let code = cur.of_asset.get(i).cloned().flatten();
            json!({"asset": a, "currency": code.as_deref().or(base),
                   "hedge_ratio": cur.hedge.get(i).copied().unwrap_or(0.0)})
        })
        .collect();
    let (mut exposure, mut cvar) = (Map::new(), Map::new());
    for p in r.analysis.currency.iter().flatten() {
        let per: Map<String, Value> = p
            .exposure
            .iter()
            .map(|(c, g, n)| (c.clone(), json!({"before_hedging": g, "after_hedging": n})))
            .collect();
        exposure.insert(p.portfolio.clone(), Value::Object(per));
        cvar.insert(
            p.portfolio.clone(),
            json!({"cvar": p.cvar, "cvar_without_currency_moves": p.cvar_local, "currency_share": p.share}),
        );
    }
    json!({"base": base, "per_asset": per_asset,
           "rate_differential": r.config.currency.rate_differential,
           "exposure": exposure, "cvar": cvar})
}

fn model_json(r: &RunResult, m: &ModelReport) -> Value {
    let c = r.config.confidence;
    let mut o = Map::new();
    o.insert("status".into(), json!(m.outcome.status.word()));
    if let Some(msg) = &m.outcome.message {
        o.insert("message".into(), json!(msg));
    }
    if let (Some(w), Some(pr)) = (&m.outcome.weights, &m.profile) {
        let t = pr.at(c);
        o.insert("weights".into(), weight_map(&r.data.assets, w));
        o.insert("expected_return".into(), json!(pr.expected_return));
        o.insert("var".into(), json!(t.var));
        o.insert("cvar".into(), json!(t.cvar));
        if m.family == Family::MaxRatio {
            o.insert("ratio".into(), json!(m.outcome.objective));
            o.insert("scale_t".into(), json!(m.outcome.scale));
        }
        o.insert("objective".into(), json!(m.outcome.objective));
        o.insert("turnover".into(), json!(m.turnover));
        o.insert("cost".into(), json!(m.cost));
        o.insert("expected_return_net".into(), json!(m.expected_return_net));
        o.insert("at_upper_bound".into(), json!(m.at_upper));
        o.insert("at_lower_bound".into(), json!(m.at_lower));
        o.insert("max_violation".into(), json!(m.outcome.max_violation));
        o.insert("risk".into(), risk_json(r, pr));
    }
    Value::Object(o)
}

fn risk_json(r: &RunResult, pr: &crate::risk::RiskProfile) -> Value {
    let classes: Vec<String> = r.data.meta.iter().map(|m| m.class.clone()).collect();
    let by_class = crate::risk::by_group(&pr.component_cvar, &classes);
    json!({
        "expected_return": pr.expected_return,
        "volatility": pr.volatility,
        "levels": pr.tails,
        "component_cvar": weight_map(&r.data.assets, &pr.component_cvar),
        "component_cvar_by_class": Value::Object(by_class.into_iter().map(|(k, v)| (k, json!(v))).collect()),
        "worst_loss": pr.worst_loss,
        "worst_scenario": pr.worst_scenario,
        "effective_holdings": pr.effective_holdings,
    })
}

fn constraints_json(r: &RunResult) -> Value {
    let a = &r.data.assets;
    let fs = &r.feasible;
    let groups: Vec<Value> = fs.groups.iter().map(|g| json!({
        "name": g.name, "members": g.members.iter().map(|&i| &a[i]).collect::<Vec<_>>(), "min": g.min, "max": g.max,
    })).collect();
    json!({
        "lower": weight_map(a, &fs.lower),
        "upper": weight_map(a, &fs.upper),
        "groups": groups,
        "turnover_max": fs.turnover_max,
        "current": fs.current.as_ref().map(|c| weight_map(a, c)),
        "cvar_cap": r.cvar_cap,
        "return_floor": r.return_floor,
        "excluded": r.config.exclude,
    })
}

/// `costs`: each asset's one-way cost rate as a fraction of the amount traded.
fn costs_json(r: &RunResult) -> Value {
    let rates: Vec<f64> = (0..r.data.assets.len())
        .map(|i| r.feasible.cost_rates.get(i).copied().unwrap_or(0.0))
        .collect();
    json!({"rates": weight_map(&r.data.assets, &rates)})
}

/// `trades`: per model with a portfolio, the amount bought (positive) or sold (negative) of each asset
/// traded, in the base currency: value × (weight − current weight), as the run sized them
/// ([`crate::run::Trade`]). Null without a fund value or current holdings (no money figures, or nothing to
/// trade from).
fn trades_json(r: &RunResult) -> Value {
    if r.config.fund.money.is_none() || r.data.holdings.is_none() {
        return Value::Null;
    }
    let trades: Map<String, Value> = r
        .models
        .iter()
        .filter_map(|m| m.trades.as_ref().map(|t| (m.name, t)))
        .map(|(name, list)| {
            let list: Map<String, Value> = list
                .iter()
                .filter_map(|t| t.amount.map(|a| (r.data.assets[t.asset].clone(), json!(a))))
                .collect();
            (name.to_string(), Value::Object(list))
        })
        .collect();
    Value::Object(trades)
}

/// Where the scenarios came from: `price_history`, or the scenario file as the config names it with the
/// archived copy's name and SHA-256.
fn scenario_source(r: &RunResult, inputs: &[crate::archive::InputFile]) -> Value {
    if !r.scenarios.from_file() {
        return json!({"kind": "price_history"});
    }
    let role = crate::config::Input::Scenarios.role();
    let archived = inputs.iter().find(|i| i.role == role);
    json!({"kind": "file", "file": r.config.scenario_name,
           "archived": archived.map(|i| &i.path), "sha256": archived.map(|i| &i.sha256),
           "not_run": skipped_without_history(r)})
}

/// What needs the price history and is not run on a scenario file's scenarios (results.json and the
/// checks name it).
pub fn skipped_without_history(r: &RunResult) -> Vec<&'static str> {
    crate::analysis::NEEDS_HISTORY
        .iter()
        .filter(|(_, runs_with_prices)| !runs_with_prices || r.data.full_dates.is_empty())
        .map(|(what, _)| *what)
        .collect()
}

/// The full `results.json` document.
pub fn results_json(r: &RunResult, inputs: &[crate::archive::InputFile], pack_id: &str) -> Value {
    let models: Map<String, Value> = r
        .models
        .iter()
        .map(|m| (m.name.to_string(), model_json(r, m)))
        .collect();
    let s = &r.scenarios;
    let mut v = json!({
        "tool": {"name": "tailpack", "version": env!("CARGO_PKG_VERSION")},
        "pack_id": pack_id,
        "fund": {"name": r.config.fund.name, "short_name": r.config.short_name,
                 "prepared_for": r.config.fund.prepared_for, "prepared_by": r.config.fund.prepared_by},
        "fund_value": r.config.fund.money.as_ref().map(|m| m.value),
        "base_currency": r.config.currency.base,
        "costs": costs_json(r),
        "trades": trades_json(r),
        "as_of": r.data.as_of.to_string(),
        "confidence": r.config.confidence,
        "tail_fraction": 1.0 - r.config.confidence,
        "levels": r.config.levels,
        "assets": r.data.assets,
        "classes": r.data.meta.iter().map(|m| &m.class).collect::<Vec<_>>(),
        "currency": currency_json(r),
        "constraints": constraints_json(r),
        "preconditions": r.preconditions,
        "models": models,
        "current": r.current.as_ref().map(|pr| risk_json(r, pr)),
        "scenarios": {"count": s.len(), "horizon": s.horizon, "step": s.step, "first_start": s.starts.first().map(|d| d.to_string()),
                      "last_end": s.ends.last().map(|d| d.to_string()), "equal_probabilities": s.equal_probabilities,
                      "half_life": r.config.scenarios.half_life, "lookback_years": r.config.scenarios.lookback_years,
                      "frequency": r.data.frequency, "source": scenario_source(r, inputs)},
        "data_quality": r.data.quality,
        "valuation": r.data.valuation,
        "history": {"first": r.data.history.0.to_string(), "last": r.data.history.1.to_string(), "layout": r.data.layout},
        "checks": r.checks,
        "solver": {"backend": r.backend.name(), "description": crate::models::lp::backend_description(r.backend)},
        "inputs": inputs,
        "signoff": signoff_json(r),
        "frontier": frontier_json(r),
        "stress": stress_json(r),
        "backtest": backtest_json(r),
        "policy": policy_json(r),
        "bands": bands_json(r),
        "liabilities": liabilities_json(r),
    });
    v["change"] = change_json(r, &v);
    v
}

/// The change since the fund's previous pack ([`crate::analysis::change::section`]), compared with this
/// pack's own results as written.
fn change_json(r: &RunResult, results: &Value) -> Value {
    crate::analysis::change::section(&r.past, results, &r.scenarios, r.config.confidence)
}

/// The estimation-error bands: per family, [p5, p50, p95] of every weight, of expected return and CVaR on
/// the original scenarios, and how often each asset is held; `null` when switched off.
fn bands_json(r: &RunResult) -> Value {
    let Some(b) = &r.analysis.bands else {
        return Value::Null;
    };
    let assets = &r.data.assets;
    let models: Map<String, Value> = b.models.iter().map(|m| (m.model.to_string(), json!({
        "solved": m.solved,
        "weights": Value::Object(assets.iter().zip(&m.weights).map(|(a, w)| (a.clone(), json!(w))).collect()),
        "expected_return": m.expected_return, "cvar": m.cvar,
        "held_share": weight_map(assets, &m.held_share), "held_above": crate::analysis::bands::HELD_ABOVE,
        "mean_turnover_from_point": m.mean_turnover,
    }))).collect();
    json!({"resamples": b.resamples, "block_length": b.block_length, "seed": b.seed.to_string(),
           "percentiles": crate::analysis::bands::PERCENTILES, "models": models})
}

/// The policy block: lines, benchmark weights, each portfolio's exposure and breaches, and active risk
/// against the policy benchmark; `null` without a policy (a `policy.not_configured` check says so).
fn policy_json(r: &RunResult) -> Value {
    let Some(p) = &r.policy else {
        return Value::Null;
    };
    let lines: Vec<Value> = p.lines.iter().map(|l| json!({
        "name": l.name, "members": l.members, "target": l.target, "min": l.min, "max": l.max, "benchmark": l.benchmark,
    })).collect();
    let portfolios: Map<String, Value> = p.positions.iter().map(|x| (x.portfolio.clone(), json!({
        "exposure": x.exposure,
        "distance": x.exposure.iter().zip(&p.lines).map(|(e, l)| e - l.target).collect::<Vec<_>>(),
        "breaches": x.breaches,
    }))).collect();
    let active: Map<String, Value> = p
        .positions
        .iter()
        .map(|x| (x.portfolio.clone(), active_json(r, &x.active)))
        .collect();
    json!({
        "lines": lines,
        "benchmark_weights": Value::Object(p.benchmark_weights.iter().map(|(s, w)| (s.clone(), json!(w))).collect()),
        "ranges_as_limits": p.ranges_as_limits,
        "active_cvar_budget": r.config.policy.as_ref().and_then(|p| p.active_cvar_budget),
        "horizons_per_year": p.horizons_per_year,
        "annualisation": "tracking_error_annualised = tracking_error × √horizons_per_year; horizons_per_year = observations a year in the scenario window ((rows − 1) over its calendar years of 365.25 days) ÷ the horizon in observations",
        "portfolios": portfolios,
        "active": active,
    })
}

/// The liabilities block: present value, funded ratio, proxy, duration, the models' basis, and per
/// portfolio the surplus VaR and CVaR at the model confidence (every level under `levels`), the hedge ratio
/// and the funded ratio at the discount rate ±1 pp; `null` without liabilities.
fn liabilities_json(r: &RunResult) -> Value {
    let Some(l) = &r.liabilities else {
        return Value::Null;
    };
    let c = r.config.confidence;
    let portfolios: Map<String, Value> = l
        .positions
        .iter()
        .map(|x| {
            (
                x.portfolio.clone(),
                json!({
                    "surplus_var": x.surplus.at(c).var,
                    "surplus_cvar": x.surplus.at(c).cvar,
                    "surplus_expected_return": x.surplus.expected_return,
                    "surplus_volatility": x.surplus.volatility,
                    "levels": x.surplus.tails,
                    "funded_ratio_tail": x.funded_ratio_tail,
                    "hedge_ratio": x.hedge_ratio,
                    "funded_ratio_rate_down": x.funded_ratio_rate_down,
                    "funded_ratio_rate_up": x.funded_ratio_rate_up,
                    "stress": x.stress.iter().zip(&r.analysis.shocks).map(|(s, k)| json!({
                        "shock": k.name, "surplus_change": s.surplus_change, "funded_ratio": s.funded_ratio,
                    })).collect::<Vec<_>>(),
                }),
            )
        })
        .collect();
    json!({
        "value": l.liabilities.value,
        "funded_ratio": l.funded_ratio,
        "proxy": l.liabilities.proxy,
        "duration": l.liabilities.duration,
        "convexity": l.liabilities.convexity,
        "basis": l.basis.name(),
        "rate_move": crate::analysis::liabilities::RATE_MOVE,
        "funded_ratio_tail_share": crate::analysis::liabilities::FUNDED_TAIL,
        "stress_proxy_returns": r.analysis.shocks.iter().map(|k| json!({"shock": k.name, "proxy_return": k.liabilities})).collect::<Vec<_>>(),
        "portfolios": portfolios,
    })
}

/// One portfolio's active risk: horizon figures, active VaR/CVaR per level, Euler contributions to
/// active CVaR at the model confidence by class and the benchmark's side.
fn active_json(r: &RunResult, a: &crate::risk::ActiveRisk) -> Value {
    let classes: Vec<String> = r.data.meta.iter().map(|m| m.class.clone()).collect();
    let by_class = crate::risk::by_group(&a.component, &classes);
    json!({
        "active_return": a.active_return,
        "tracking_error": a.tracking_error,
        "tracking_error_annualised": a.tracking_error_annualised,
        "active_cvar": a.at(r.config.confidence).cvar,
        "levels": a.tails,
        "active_cvar_by_class": Value::Object(by_class.into_iter().map(|(k, v)| (k, json!(v))).collect()),
        "active_cvar_benchmark": a.benchmark_component,
    })
}

/// The draft's sign-off block: the configured roles, unsigned (`finalize` renders the signed version).
fn signoff_json(r: &RunResult) -> Value {
    if r.config.signoff.is_empty() {
        return Value::Null;
    }
    let roles: Vec<Value> = r.config.signoff.iter().map(|s| json!({
        "role": s.role, "title": s.title.clone().unwrap_or_else(|| s.role.clone()), "name": null, "signed_at": null, "fingerprint": null,
    })).collect();
    json!({"status": "DRAFT", "roles": roles})
}

fn frontier_json(r: &RunResult) -> Value {
    let Some(f) = &r.analysis.frontier else {
        return Value::Null;
    };
    let points: Vec<Value> = f.points.iter().map(|p| json!({
        "cvar_cap": p.cvar_cap, "status": p.status, "expected_return": p.expected_return, "cvar": p.cvar, "var": p.var,
        "weights": p.weights.as_ref().map(|w| weight_map(&r.data.assets, w)),
    })).collect();
    json!({"confidence": r.config.confidence, "min_cvar": f.min_cvar, "max_return_cvar": f.max_return_cvar, "points": points})
}

fn stress_json(r: &RunResult) -> Value {
    let a = &r.analysis;
    let shocks: Vec<Value> = a.shocks.iter().map(|s| json!({
        "name": s.name, "kind": s.kind, "description": s.description, "start": s.start.map(|d| d.to_string()),
        "end": s.end.map(|d| d.to_string()), "returns": weight_map(&r.data.assets, &s.returns), "unshocked": s.unshocked,
    })).collect();
    let portfolios: Map<String, Value> = a.stress.iter().map(|p| (p.portfolio.clone(), json!({
        "pnl": p.pnl,
        "worst": {"shock": a.shocks.get(p.worst).map(|s| &s.name), "pnl": p.pnl.get(p.worst)},
        "by_class": p.by_class.iter().map(|c| Value::Object(c.iter().map(|(k, v)| (k.clone(), json!(v))).collect())).collect::<Vec<_>>(),
        "breaches": p.breaches.iter().map(|&k| &a.shocks[k].name).collect::<Vec<_>>(),
    }))).collect();
    json!({"loss_limit": r.config.stress_loss_limit, "shocks": shocks, "portfolios": portfolios})
}

fn backtest_json(r: &RunResult) -> Value {
    let Some(b) = &r.analysis.backtest else {
        return Value::Null;
    };
    let surplus = r.config.basis == crate::config::Basis::Surplus;
    let models: Map<String, Value> = b.tracks.iter().map(|t| (t.model.to_string(), json!({
        "observations": t.observations, "exceptions": t.exceptions, "expected_exceptions": t.expected_exceptions,
        "kupiec": t.kupiec, "christoffersen": t.christoffersen, "mean_prediction_error": t.mean_prediction_error,
        "final_wealth": t.final_wealth, "daily_var_99": t.daily, "total_cost": t.total_cost, "ex_post_active": t.ex_post,
        "months": t.rows.iter().map(|row| json!({
            "date": row.date.to_string(), "next": row.next.to_string(), "status": row.status,
            "predicted_return": row.predicted_return, "realised_return": row.realised_return,
            "predicted_minus_realised": row.predicted_return.zip(if surplus { row.realised_surplus_return } else { row.realised_return }).map(|(p, q)| p - q),
            "predicted_var": row.predicted_var, "predicted_cvar": row.predicted_cvar, "turnover": row.turnover,
            "cost": row.cost, "realised_return_net": row.realised_return_net,
            "wealth": row.wealth, "exception": row.exception, "active_return": row.active_return,
            "weights": row.weights.as_ref().map(|w| weight_map(&r.data.assets, w)),
            "realised_surplus_return": row.realised_surplus_return,
        })).collect::<Vec<_>>(),
    }))).collect();
    json!({"confidence": b.confidence, "rebalances": b.rebalances.len(), "first": b.rebalances.first().map(|d| d.to_string()),
           "last": b.rebalances.last().map(|d| d.to_string()),
           "skipped": b.skipped.iter().map(|(d, why)| json!({"date": d.to_string(), "reason": why})).collect::<Vec<_>>(),
           "benchmark_returns": b.benchmark, "models": models,
           "liability_proxy_returns": b.liabilities, "basis": r.config.basis.name()})
}

/// A return with its sign, e.g. `+0.31%`.
fn pct(x: f64) -> String {
    format!("{:+.2}%", x * 100.0)
}

/// A loss as a plain percentage, e.g. `5.25%` (a negative value means a gain).
fn loss(x: f64) -> String {
    format!("{:.2}%", x * 100.0)
}

/// The short text summary printed to stdout and kept as `summary.txt`.
pub fn summary(r: &RunResult) -> String {
    let mut s = summary_heading(r);
    summary_rows(&mut s, r);
    summary_checks(&mut s, r);
    s
}

/// The summary's first lines: the fund, the data, and the column heads with their units.
fn summary_heading(r: &RunResult) -> String {
    let c = r.config.confidence;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} — as of {} — {} scenarios of {}, {} assets, CVaR at {:.1}%",
        r.config.fund.name,
        r.data.as_of,
        r.scenarios.len(),
        r.data.frequency.span(r.scenarios.horizon),
        r.data.assets.len(),
        c * 100.0
    );
    let _ = writeln!(
        s,
        "{:<12} {:<15} {:>10} {:>10} {:>10} {:>9} {:>9}",
        "portfolio", "status", "exp.return", "VaR", "CVaR", "turnover", "eff.hold"
    );
    let _ = writeln!(
        s,
        "(expected return, VaR and CVaR over the {}-{} horizon; VaR and CVaR as losses at {:.1}%)",
        r.scenarios.horizon,
        r.data.frequency.period(),
        c * 100.0
    );
    s
}

/// One row per portfolio (the current one first), the max-ratio model's ratio when it was solved, and each
/// model's transaction cost when costs are charged.
fn summary_rows(s: &mut String, r: &RunResult) {
    if let Some(pr) = &r.current {
        profile_row(s, r, ("current", "-"), pr, "-".into());
    }
    for m in &r.models {
        let status = m.outcome.status.word();
        match &m.profile {
            Some(pr) => {
                let turn = m
                    .turnover
                    .map_or("-".into(), |v| format!("{:.1}%", v * 100.0));
                profile_row(s, r, (m.name, status), pr, turn);
            }
            None => {
                let why = m.outcome.message.as_deref().unwrap_or("");
                let _ = writeln!(s, "{:<12} {:<15} {why}", m.name, status);
            }
        }
    }
    ratio_and_costs(s, r);
}

/// A portfolio's row: name, status, expected return, VaR, CVaR, turnover and effective holdings.
fn profile_row(
    s: &mut String,
    r: &RunResult,
    (name, status): (&str, &str),
    pr: &crate::risk::RiskProfile,
    turnover: String,
) {
    let t = pr.at(r.config.confidence);
    let _ = writeln!(
        s,
        "{:<12} {:<15} {:>10} {:>10} {:>10} {:>9} {:>9.1}",
        name,
        status,
        pct(pr.expected_return),
        loss(t.var),
        loss(t.cvar),
        turnover,
        pr.effective_holdings
    );
}

/// The max-ratio model's ratio when it was solved, then each model's cost when costs are charged.
fn ratio_and_costs(s: &mut String, r: &RunResult) {
    let net = if r.feasible.charges_costs() {
        " net of transaction costs"
    } else {
        ""
    };
    if let Some(m) = r
        .models
        .iter()
        .find(|m| m.family == Family::MaxRatio && m.outcome.status == Status::Optimal)
    {
        let _ = writeln!(
            s,
            "{}: expected return{net} / CVaR = {:.4}",
            Family::MaxRatio.name(),
            m.outcome.objective.unwrap_or(f64::NAN)
        );
    }
    let costs: Vec<String> = r
        .models
        .iter()
        .filter_map(|m| m.cost.map(|c| format!("{} {:.1}", m.name, c * 1e4)))
        .collect();
    if r.feasible.charges_costs() && !costs.is_empty() {
        let _ = writeln!(
            s,
            "transaction cost of getting there (basis points of the fund's value): {}",
            costs.join(", ")
        );
    }
}

/// The count of checks by level, then every check that did not pass.
fn summary_checks(s: &mut String, r: &RunResult) {
    use crate::diag::Level;
    let count = |l: Level| r.checks.iter().filter(|c| c.level == l).count();
    let (warns, fails) = (count(Level::Warn), count(Level::Fail));
    let _ = writeln!(
        s,
        "checks: {} pass, {warns} warn, {fails} fail (see results.json \"checks\")",
        r.checks.len() - warns - fails
    );
    for c in r.checks.iter().filter(|c| c.level != Level::Pass) {
        let _ = writeln!(s, "  {}: {}", c.level.word(), c.message);
    }
}

/// Writes the pack as the next revision of its fund/as-of folder, atomically (the caller then rebuilds the
/// archive index, which needs the sign-off layer). Returns the pack folder and the summary text. Call with
/// the archive lock held.
///
/// Every output, the PDF included, is made in memory before any folder is created, so while the hidden
/// temporary folder exists only plain file writes happen; a [`Partial`] guard removes it on every error
/// and panic. A process killed mid-write leaves it hidden, and the next run removes it under the lock.
pub fn write(r: &RunResult, plan: &crate::archive::Plan) -> Result<(PathBuf, String)> {
    let made = outputs(r, plan)?;
    let folder = &plan.folder;
    let mut guard = Partial::new(folder);
    fs::create_dir_all(folder)?;
    crate::archive::clean_partials(folder);
    let revs = crate::archive::revisions(folder);
    let revision = revs.last().map_or(1, |(k, _)| k + 1);
    let previous = revs.last().map(|(_, p)| p.clone());
    let dir = folder.join(format!("r{revision}"));
    let tmp = guard.create(format!(".partial-r{revision}-{}", std::process::id()))?;
    timings::time("writing", || store(&made, &tmp))?;
    timings::time("hashing", || {
        crate::archive::seal(&tmp, plan, &r.config, revision, previous.as_deref())
    })?;
    fs::rename(&tmp, &dir)?;
    guard.placed();
    let shown = std::fs::canonicalize(&dir).unwrap_or(dir);
    let note = previous
        .map(|p| {
            format!(
                "revision r{revision} (changed inputs: {}) replaces {}\n",
                crate::archive::changed_inputs(&p, plan).join(", "),
                p.display()
            )
        })
        .unwrap_or_default();
    Ok((
        shown.clone(),
        format!("{}{note}pack: {}\n", made.summary, shown.display()),
    ))
}

/// The hidden temporary folder of a pack being written, removed when dropped unless it was renamed into
/// place — on an error return and on a panic alike — together with the fund and as-of folders if they
/// are left empty.
struct Partial {
    folder: PathBuf,
    tmp: Option<PathBuf>,
    placed: bool,
}

impl Partial {
    fn new(folder: &Path) -> Self {
        Partial {
            folder: folder.to_path_buf(),
            tmp: None,
            placed: false,
        }
    }

    /// Creates the temporary folder `name` inside the fund/as-of folder.
    fn create(&mut self, name: String) -> Result<PathBuf> {
        let tmp = self.folder.join(name);
        self.tmp = Some(tmp.clone());
        fs::create_dir_all(&tmp)?;
        Ok(tmp)
    }

    /// The folder was renamed into place: nothing to remove.
    fn placed(mut self) {
        self.placed = true;
    }
}

impl Drop for Partial {
    fn drop(&mut self) {
        if self.placed {
            return;
        }
        if let Some(tmp) = &self.tmp {
            let _ = std::fs::remove_dir_all(tmp);
        }
        // Only empty folders go: the fund/as-of folders this run made, never earlier revisions.
        let _ = std::fs::remove_dir(&self.folder);
        let _ = self.folder.parent().map(std::fs::remove_dir);
    }
}

/// The output files of a run, made in memory, and the summary text.
pub struct Outputs {
    /// File name and bytes, in writing order.
    pub files: Vec<(&'static str, Vec<u8>)>,
    pub summary: String,
}

/// Makes every output of a run in memory: scenarios, weights, results, the typeset PDF, the summary.
pub fn outputs(r: &RunResult, plan: &crate::archive::Plan) -> Result<Outputs> {
    let inputs = crate::archive::input_list(plan);
    let id = &plan.pack_id;
    let (mut files, results) = timings::time("writing", || {
        let results = results_json(r, &inputs, id);
        let json = serde_json::to_string_pretty(&results).expect("results serialise") + "\n";
        let mut files = vec![];
        // Scenarios from a scenario file are in the pack as that file, archived under inputs/: not
        // written again (200 million cells would be gigabytes of text).
        if !r.scenarios.from_file() {
            files.push(("scenarios.csv", scenarios_csv(r).into_bytes()));
        }
        files.push(("weights.csv", weights_csv(r).into_bytes()));
        files.push(("results.json", json.into_bytes()));
        if let Some(csv) = reference_scenarios_csv(r).filter(|_| !r.scenarios.from_file()) {
            files.push(("reference-scenarios.csv", csv.into_bytes()));
        }
        (files, results)
    });
    let pdf = crate::report::render_with(r, &results, id, recorded_templates(plan))?;
    files.push(("pack.pdf", pdf));
    let summary = summary(r);
    files.push(("summary.txt", summary.clone().into_bytes()));
    Ok(Outputs { files, summary })
}

/// The custom template files as the plan read and recorded them (built-in ones have no source file).
fn recorded_templates(plan: &crate::archive::Plan) -> Vec<crate::report::templates::CustomFile> {
    plan.files
        .iter()
        .filter(|f| f.role == "template")
        .filter_map(|f| {
            Some(crate::report::templates::CustomFile {
                rel: f.name.strip_prefix("templates/")?.to_string(),
                path: f.source.clone()?,
                bytes: f.bytes.clone(),
            })
        })
        .collect()
}

/// Writes made outputs into `dir`.
pub fn store(made: &Outputs, dir: &Path) -> Result<()> {
    for (name, bytes) in &made.files {
        fs::write(&dir.join(name), bytes)?;
    }
    Ok(())
}

/// Writes the outputs of a run into `dir` (results, scenarios, weights, summary, PDF).
pub fn fill(r: &RunResult, dir: &Path, plan: &crate::archive::Plan) -> Result<String> {
    let made = outputs(r, plan)?;
    timings::time("writing", || store(&made, dir))?;
    Ok(made.summary)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::archive::{Archived, Plan};

    fn archived(role: &'static str, name: &str, source: Option<&str>, bytes: &[u8]) -> Archived {
        Archived {
            role,
            name: name.into(),
            source: source.map(PathBuf::from),
            bytes: bytes.to_vec(),
            sha256: String::new(),
        }
    }

    #[test]
    fn the_typesetter_gets_the_custom_templates_the_plan_recorded() {
        let plan = Plan {
            files: vec![
                archived("config", "config.yaml", Some("fund.yaml"), b"fund: {}"),
                archived("template", "templates/main.typ", None, b"built-in"),
                archived(
                    "template",
                    "templates/parts/summary.typ",
                    Some("tpl/parts/summary.typ"),
                    b"as hashed",
                ),
            ],
            listing: String::new(),
            pack_id: String::new(),
            folder: PathBuf::new(),
        };
        let got = recorded_templates(&plan);
        assert_eq!(
            got.len(),
            1,
            "built-in templates and other inputs are not custom files"
        );
        assert_eq!(got[0].rel, "parts/summary.typ");
        assert_eq!(got[0].path, PathBuf::from("tpl/parts/summary.typ"));
        assert_eq!(got[0].bytes, b"as hashed");
    }
}
