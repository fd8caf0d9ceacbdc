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

pub mod results;
use serde_json::Value;
use std::collections::BTreeMap;
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

fn weight_map(assets: &[String], w: &[f64]) -> results::PerAsset {
    assets.iter().cloned().zip(w.iter().copied()).collect()
}

/// A figure that may have no value (NaN): `None` then, which JSON writes as null as it would the NaN.
fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// [p5, p50, p95] of a band, each `None` where no resample solved.
fn band(b: &[f64; 3]) -> [Option<f64>; 3] {
    b.map(finite)
}

/// Per asset its currency (the base currency's code, or null without one) and hedge ratio; the rate
/// differentials; every portfolio's exposure per foreign currency before and after hedging and its CVaR
/// with and without currency moves (`analysis::currency`).
fn currency_part(r: &RunResult) -> results::Currency {
    let cur = &r.data.currency;
    let base = r.config.currency.base.clone();
    let per_asset = (r.data.assets.iter().enumerate())
        .map(|(i, a)| results::AssetCurrency {
            asset: a.clone(),
            currency: cur.of_asset.get(i).cloned().flatten().or(base.clone()),
            hedge_ratio: cur.hedge.get(i).copied().unwrap_or(0.0),
        })
        .collect();
    let (mut exposure, mut cvar) = (BTreeMap::new(), BTreeMap::new());
    for p in r.analysis.currency.iter().flatten() {
        let per = (p.exposure.iter())
            .map(|(c, g, n)| {
                let e = results::CurrencyExposure {
                    before_hedging: *g,
                    after_hedging: *n,
                };
                (c.clone(), e)
            })
            .collect();
        exposure.insert(p.portfolio.clone(), per);
        let c = results::CurrencyCvar {
            cvar: p.cvar,
            cvar_without_currency_moves: p.cvar_local,
            currency_share: p.share,
        };
        cvar.insert(p.portfolio.clone(), c);
    }
    results::Currency {
        base,
        per_asset,
        rate_differential: r.config.currency.rate_differential.clone(),
        exposure,
        cvar,
    }
}

fn model_part(r: &RunResult, m: &ModelReport) -> results::Model {
    let solved = (m.outcome.weights.as_ref())
        .zip(m.profile.as_ref())
        .map(|(w, pr)| solved_part(r, m, w, pr));
    results::Model {
        status: m.outcome.status.word().to_string(),
        message: m.outcome.message.clone(),
        solved,
    }
}

/// A solved model's figures; `ratio` and `scale_t` for the max-ratio family only.
fn solved_part(
    r: &RunResult,
    m: &ModelReport,
    w: &[f64],
    pr: &crate::risk::RiskProfile,
) -> results::Solved {
    let t = pr.at(r.config.confidence);
    let ratio = m.family == Family::MaxRatio;
    results::Solved {
        weights: weight_map(&r.data.assets, w),
        expected_return: pr.expected_return,
        var: t.var,
        cvar: t.cvar,
        ratio: ratio.then_some(m.outcome.objective),
        scale_t: ratio.then_some(m.outcome.scale),
        objective: m.outcome.objective,
        turnover: m.turnover,
        cost: m.cost,
        expected_return_net: m.expected_return_net,
        at_upper_bound: m.at_upper.clone(),
        at_lower_bound: m.at_lower.clone(),
        max_violation: m.outcome.max_violation,
        risk: risk_part(r, pr),
    }
}

fn risk_part(r: &RunResult, pr: &crate::risk::RiskProfile) -> results::Risk {
    let classes: Vec<String> = r.data.meta.iter().map(|m| m.class.clone()).collect();
    let by_class = crate::risk::by_group(&pr.component_cvar, &classes);
    results::Risk {
        expected_return: pr.expected_return,
        volatility: pr.volatility,
        levels: pr.tails.clone(),
        component_cvar: weight_map(&r.data.assets, &pr.component_cvar),
        component_cvar_by_class: by_class.into_iter().collect(),
        worst_loss: pr.worst_loss,
        worst_scenario: pr.worst_scenario.clone(),
        effective_holdings: pr.effective_holdings,
    }
}

fn constraints_part(r: &RunResult) -> results::Constraints {
    let a = &r.data.assets;
    let fs = &r.feasible;
    let groups = (fs.groups.iter())
        .map(|g| results::Group {
            name: g.name.clone(),
            members: g.members.iter().map(|&i| a[i].clone()).collect(),
            min: g.min,
            max: g.max,
        })
        .collect();
    results::Constraints {
        lower: weight_map(a, &fs.lower),
        upper: weight_map(a, &fs.upper),
        groups,
        turnover_max: fs.turnover_max,
        current: fs.current.as_ref().map(|c| weight_map(a, c)),
        cvar_cap: finite(r.cvar_cap),
        return_floor: finite(r.return_floor),
        excluded: r.config.exclude.clone(),
    }
}

/// `costs`: each asset's one-way cost rate as a fraction of the amount traded.
fn costs_part(r: &RunResult) -> results::Costs {
    let rates: Vec<f64> = (0..r.data.assets.len())
        .map(|i| r.feasible.cost_rates.get(i).copied().unwrap_or(0.0))
        .collect();
    results::Costs {
        rates: weight_map(&r.data.assets, &rates),
    }
}

/// `trades`: per model with a portfolio, the amount bought (positive) or sold (negative) of each asset
/// traded, in the base currency: value × (weight − current weight), as the run sized them
/// ([`crate::run::Trade`]). Null without a fund value or current holdings (no money figures, or nothing to
/// trade from).
fn trades_part(r: &RunResult) -> Option<BTreeMap<String, results::PerAsset>> {
    if r.config.fund.money.is_none() || r.data.holdings.is_none() {
        return None;
    }
    let trades = (r.models.iter())
        .filter_map(|m| m.trades.as_ref().map(|t| (m.name, t)))
        .map(|(name, list)| {
            let list = (list.iter())
                .filter_map(|t| t.amount.map(|a| (r.data.assets[t.asset].clone(), a)))
                .collect();
            (name.to_string(), list)
        })
        .collect();
    Some(trades)
}

/// Where the scenarios came from: `price_history`, or the scenario file as the config names it with the
/// archived copy's name and SHA-256.
fn scenario_source(r: &RunResult, inputs: &[crate::archive::InputFile]) -> results::ScenarioSource {
    if !r.scenarios.from_file() {
        return results::ScenarioSource {
            kind: "price_history".into(),
            file: None,
            archived: None,
            sha256: None,
            not_run: None,
        };
    }
    let role = crate::config::Input::Scenarios.role();
    let archived = inputs.iter().find(|i| i.role == role);
    results::ScenarioSource {
        kind: "file".into(),
        file: r.config.scenario_name.clone(),
        archived: archived.map(|i| i.path.clone()),
        sha256: archived.map(|i| i.sha256.clone()),
        not_run: Some(
            skipped_without_history(r)
                .iter()
                .map(|w| (*w).to_string())
                .collect(),
        ),
    }
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

/// The full `results.json` document, as its types ([`results::Results`]) serialise it (object keys
/// sorted).
pub fn results_json(r: &RunResult, inputs: &[crate::archive::InputFile], pack_id: &str) -> Value {
    let mut doc = results(r, inputs, pack_id);
    let v = serde_json::to_value(&doc).expect("results serialise");
    doc.change = change_json(r, &v);
    serde_json::to_value(&doc).expect("results serialise")
}

/// `results.json` as its types, `change` still null (it compares the rest with the previous pack).
fn results(r: &RunResult, inputs: &[crate::archive::InputFile], pack_id: &str) -> results::Results {
    let fund = &r.config.fund;
    results::Results {
        tool: results::Tool {
            name: "tailpack".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        pack_id: pack_id.to_string(),
        fund: results::Fund {
            name: fund.name.clone(),
            short_name: r.config.short_name.clone(),
            prepared_for: fund.prepared_for.clone(),
            prepared_by: fund.prepared_by.clone(),
        },
        fund_value: fund.money.as_ref().map(|m| m.value),
        base_currency: r.config.currency.base.clone(),
        costs: costs_part(r),
        trades: trades_part(r),
        as_of: r.data.as_of.to_string(),
        confidence: r.config.confidence,
        tail_fraction: 1.0 - r.config.confidence,
        levels: r.config.levels.clone(),
        assets: r.data.assets.clone(),
        classes: r.data.meta.iter().map(|m| m.class.clone()).collect(),
        currency: currency_part(r),
        constraints: constraints_part(r),
        preconditions: r.preconditions.clone(),
        models: (r.models.iter())
            .map(|m| (m.name.to_string(), model_part(r, m)))
            .collect(),
        current: r.current.as_ref().map(|pr| risk_part(r, pr)),
        scenarios: scenarios_part(r, inputs),
        data_quality: r.data.quality.clone(),
        valuation: r.data.valuation.clone(),
        history: results::History {
            first: r.data.history.0.to_string(),
            last: r.data.history.1.to_string(),
            layout: r.data.layout,
        },
        checks: r.checks.clone(),
        solver: results::Solver {
            backend: r.backend.name().to_string(),
            description: crate::models::lp::backend_description(r.backend).to_string(),
        },
        inputs: inputs.to_vec(),
        signoff: signoff_part(r),
        frontier: frontier_part(r),
        stress: stress_part(r),
        backtest: backtest_part(r),
        policy: policy_part(r),
        bands: bands_part(r),
        liabilities: liabilities_part(r),
        change: Value::Null,
    }
}

fn scenarios_part(r: &RunResult, inputs: &[crate::archive::InputFile]) -> results::Scenarios {
    let s = &r.scenarios;
    let date = |d: Option<&chrono::NaiveDate>| d.map(|d| d.to_string());
    results::Scenarios {
        count: s.len(),
        horizon: s.horizon,
        step: s.step,
        first_start: date(s.starts.first()),
        last_end: date(s.ends.last()),
        equal_probabilities: s.equal_probabilities,
        half_life: r.config.scenarios.half_life,
        lookback_years: r.config.scenarios.lookback_years,
        frequency: r.data.frequency,
        source: scenario_source(r, inputs),
    }
}

/// The change since the fund's previous pack ([`crate::analysis::change::section`]), compared with this
/// pack's own results as written.
fn change_json(r: &RunResult, results: &Value) -> Value {
    let offsets = crate::analysis::liabilities::basis_offsets(&r.config, &r.reference);
    let now = crate::analysis::change::Now {
        set: &r.scenarios,
        offsets: offsets.as_deref(),
    };
    crate::analysis::change::section(&r.past, results, &now, r.config.confidence)
}

/// The estimation-error bands: per family, [p5, p50, p95] of every weight, of expected return and CVaR on
/// the original scenarios, and how often each asset is held; `null` when switched off.
fn bands_part(r: &RunResult) -> Option<results::Bands> {
    let b = r.analysis.bands.as_ref()?;
    let assets = &r.data.assets;
    let models = (b.models.iter())
        .map(|m| {
            let bands = results::ModelBands {
                solved: m.solved,
                weights: assets
                    .iter()
                    .cloned()
                    .zip(m.weights.iter().map(band))
                    .collect(),
                expected_return: band(&m.expected_return),
                cvar: band(&m.cvar),
                held_share: (assets.iter().cloned())
                    .zip(m.held_share.iter().map(|&x| finite(x)))
                    .collect(),
                held_above: crate::analysis::bands::HELD_ABOVE,
                mean_turnover_from_point: m.mean_turnover,
            };
            (m.model.to_string(), bands)
        })
        .collect();
    Some(results::Bands {
        resamples: b.resamples,
        block_length: b.block_length,
        seed: b.seed.to_string(),
        percentiles: crate::analysis::bands::PERCENTILES,
        models,
    })
}

/// The policy block: lines, benchmark weights, each portfolio's exposure and breaches, and active risk
/// against the policy benchmark; `null` without a policy (a `policy.not_configured` check says so).
fn policy_part(r: &RunResult) -> Option<results::Policy> {
    let p = r.policy.as_ref()?;
    let lines = (p.lines.iter())
        .map(|l| results::PolicyLine {
            name: l.name.clone(),
            members: l.members.clone(),
            target: l.target,
            min: l.min,
            max: l.max,
            benchmark: l.benchmark.clone(),
        })
        .collect();
    let portfolios = (p.positions.iter())
        .map(|x| {
            let distance = x.exposure.iter().zip(&p.lines).map(|(e, l)| e - l.target);
            let one = results::PolicyPortfolio {
                exposure: x.exposure.clone(),
                distance: distance.collect(),
                breaches: x.breaches.clone(),
            };
            (x.portfolio.clone(), one)
        })
        .collect();
    let active = (p.positions.iter())
        .map(|x| (x.portfolio.clone(), active_part(r, &x.active)))
        .collect();
    Some(results::Policy {
        lines,
        benchmark_weights: p.benchmark_weights.iter().cloned().collect(),
        ranges_as_limits: p.ranges_as_limits,
        active_cvar_budget: r.config.policy.as_ref().and_then(|p| p.active_cvar_budget),
        horizons_per_year: p.horizons_per_year,
        annualisation: "tracking_error_annualised = tracking_error × √horizons_per_year; horizons_per_year = observations a year in the scenario window ((rows − 1) over its calendar years of 365.25 days) ÷ the horizon in observations".into(),
        portfolios,
        active,
    })
}

/// The liabilities block: present value, funded ratio, proxy, duration, the models' basis, and per
/// portfolio the surplus VaR and CVaR at the model confidence (every level under `levels`), the hedge ratio
/// and the funded ratio at the discount rate ±1 pp; `null` without liabilities.
fn liabilities_part(r: &RunResult) -> Option<results::Liabilities> {
    let l = r.liabilities.as_ref()?;
    let shocks = &r.analysis.shocks;
    let portfolios = (l.positions.iter())
        .map(|x| (x.portfolio.clone(), surplus_part(r, x)))
        .collect();
    let proxy = (shocks.iter())
        .map(|k| results::ProxyReturn {
            shock: k.name.clone(),
            proxy_return: k.liabilities,
        })
        .collect();
    Some(results::Liabilities {
        value: l.liabilities.value,
        funded_ratio: l.funded_ratio,
        proxy: l.liabilities.proxy.clone(),
        duration: l.liabilities.duration,
        convexity: l.liabilities.convexity,
        basis: l.basis.name().to_string(),
        rate_move: crate::analysis::liabilities::RATE_MOVE,
        funded_ratio_tail_share: crate::analysis::liabilities::FUNDED_TAIL,
        stress_proxy_returns: proxy,
        portfolios,
    })
}

/// One portfolio's surplus figures at the model confidence, and under each shock.
fn surplus_part(
    r: &RunResult,
    x: &crate::analysis::liabilities::SurplusPosition,
) -> results::Surplus {
    let t = x.surplus.at(r.config.confidence);
    let stress = (x.stress.iter().zip(&r.analysis.shocks))
        .map(|(s, k)| results::SurplusShock {
            shock: k.name.clone(),
            surplus_change: s.surplus_change,
            funded_ratio: s.funded_ratio,
        })
        .collect();
    results::Surplus {
        surplus_var: t.var,
        surplus_cvar: t.cvar,
        surplus_expected_return: x.surplus.expected_return,
        surplus_volatility: x.surplus.volatility,
        levels: x.surplus.tails.clone(),
        funded_ratio_tail: x.funded_ratio_tail,
        hedge_ratio: x.hedge_ratio,
        funded_ratio_rate_down: x.funded_ratio_rate_down,
        funded_ratio_rate_up: x.funded_ratio_rate_up,
        stress,
    }
}

/// One portfolio's active risk: horizon figures, active VaR/CVaR per level, Euler contributions to
/// active CVaR at the model confidence by class and the benchmark's side.
fn active_part(r: &RunResult, a: &crate::risk::ActiveRisk) -> results::Active {
    let classes: Vec<String> = r.data.meta.iter().map(|m| m.class.clone()).collect();
    let by_class = crate::risk::by_group(&a.component, &classes);
    results::Active {
        active_return: a.active_return,
        tracking_error: a.tracking_error,
        tracking_error_annualised: a.tracking_error_annualised,
        active_cvar: a.at(r.config.confidence).cvar,
        levels: a.tails.clone(),
        active_cvar_by_class: by_class.into_iter().collect(),
        active_cvar_benchmark: a.benchmark_component,
    }
}

/// The draft's sign-off block: the configured roles, unsigned (`finalize` renders the signed version).
fn signoff_part(r: &RunResult) -> Option<results::Signoff> {
    if r.config.signoff.is_empty() {
        return None;
    }
    let roles = (r.config.signoff.iter())
        .map(|s| results::SignoffRole {
            role: s.role.clone(),
            title: s.title.clone().unwrap_or_else(|| s.role.clone()),
            name: None,
            signed_at: None,
            fingerprint: None,
        })
        .collect();
    Some(results::Signoff {
        status: "DRAFT".into(),
        roles,
    })
}

fn frontier_part(r: &RunResult) -> Option<results::Frontier> {
    let f = r.analysis.frontier.as_ref()?;
    let points = (f.points.iter())
        .map(|p| results::FrontierPoint {
            cvar_cap: p.cvar_cap,
            status: p.status.clone(),
            expected_return: p.expected_return,
            cvar: p.cvar,
            var: p.var,
            weights: p.weights.as_ref().map(|w| weight_map(&r.data.assets, w)),
        })
        .collect();
    Some(results::Frontier {
        confidence: r.config.confidence,
        min_cvar: f.min_cvar,
        max_return_cvar: f.max_return_cvar,
        points,
    })
}

fn stress_part(r: &RunResult) -> results::Stress {
    let a = &r.analysis;
    let date = |d: Option<chrono::NaiveDate>| d.map(|d| d.to_string());
    let shocks = (a.shocks.iter())
        .map(|s| results::Shock {
            name: s.name.clone(),
            kind: s.kind.to_string(),
            description: s.description.clone(),
            start: date(s.start),
            end: date(s.end),
            returns: weight_map(&r.data.assets, &s.returns),
            unshocked: s.unshocked.clone(),
        })
        .collect();
    let name = |k: usize| a.shocks[k].name.clone();
    let portfolios = (a.stress.iter())
        .map(|p| {
            let one = results::StressPortfolio {
                pnl: p.pnl.clone(),
                worst: results::WorstShock {
                    shock: a.shocks.get(p.worst).map(|s| s.name.clone()),
                    pnl: p.pnl.get(p.worst).copied(),
                },
                by_class: p
                    .by_class
                    .iter()
                    .map(|c| c.iter().cloned().collect())
                    .collect(),
                breaches: p.breaches.iter().map(|&k| name(k)).collect(),
            };
            (p.portfolio.clone(), one)
        })
        .collect();
    results::Stress {
        loss_limit: r.config.stress_loss_limit,
        shocks,
        portfolios,
    }
}

fn backtest_part(r: &RunResult) -> Option<results::Backtest> {
    let b = r.analysis.backtest.as_ref()?;
    let date = |d: Option<&chrono::NaiveDate>| d.map(|d| d.to_string());
    let models = (b.tracks.iter())
        .map(|t| (t.model.to_string(), track_part(r, t)))
        .collect();
    let skipped = (b.skipped.iter())
        .map(|(d, why)| results::Skipped {
            date: d.to_string(),
            reason: why.clone(),
        })
        .collect();
    Some(results::Backtest {
        confidence: b.confidence,
        rebalances: b.rebalances.len(),
        first: date(b.rebalances.first()),
        last: date(b.rebalances.last()),
        skipped,
        benchmark_returns: b.benchmark.clone(),
        models,
        liability_proxy_returns: b.liabilities.clone(),
        basis: r.config.basis.name().to_string(),
    })
}

/// One model's backtest track; on the surplus basis the prediction error is against the realised
/// surplus return.
fn track_part(r: &RunResult, t: &crate::analysis::backtest::Track) -> results::Track {
    let surplus = r.config.basis == crate::config::Basis::Surplus;
    let months = (t.rows.iter())
        .map(|row| {
            let realised = if surplus {
                row.realised_surplus_return
            } else {
                row.realised_return
            };
            results::TrackMonth {
                date: row.date.to_string(),
                next: row.next.to_string(),
                status: row.status.clone(),
                predicted_return: row.predicted_return,
                realised_return: row.realised_return,
                predicted_minus_realised: row.predicted_return.zip(realised).map(|(p, q)| p - q),
                predicted_var: row.predicted_var,
                predicted_cvar: row.predicted_cvar,
                turnover: row.turnover,
                cost: row.cost,
                realised_return_net: row.realised_return_net,
                wealth: row.wealth,
                exception: row.exception,
                active_return: row.active_return,
                weights: row.weights.as_ref().map(|w| weight_map(&r.data.assets, w)),
                realised_surplus_return: row.realised_surplus_return,
            }
        })
        .collect();
    results::Track {
        observations: t.observations,
        exceptions: t.exceptions,
        expected_exceptions: t.expected_exceptions,
        kupiec: t.kupiec,
        christoffersen: t.christoffersen,
        mean_prediction_error: t.mean_prediction_error,
        final_wealth: t.final_wealth,
        daily_var_99: t.daily.clone(),
        total_cost: t.total_cost,
        ex_post_active: t.ex_post.clone(),
        months,
    }
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
        "(expected return, VaR and CVaR over the {}-{} horizon; VaR and CVaR as losses at {:.1}%{})",
        r.scenarios.horizon,
        r.data.frequency.period(),
        c * 100.0,
        match r.config.basis {
            crate::config::Basis::Surplus => {
                "; all on the surplus basis: assets less liabilities, as a fraction of the assets"
            }
            crate::config::Basis::Assets => "",
        }
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
        crate::archive::seal(&tmp, plan, &r.config, revision, previous.as_deref())?;
        bag(&tmp, r, plan, revision)
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

/// Makes the sealed pack in `tmp` a BagIt bag (status draft: a new pack has no signature).
fn bag(tmp: &Path, r: &RunResult, plan: &crate::archive::Plan, revision: u32) -> Result<()> {
    let as_of = plan
        .folder
        .file_name()
        .unwrap_or_default()
        .to_string_lossy();
    crate::archive::bag::write(
        tmp,
        &crate::archive::bag::Info {
            fund: &r.config.fund.name,
            folder: &r.config.short_name,
            as_of: &as_of,
            revision,
            pack_id: &plan.pack_id,
            status: "draft",
            bagged: crate::archive::bag::today(),
        },
    )
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
            len: bytes.len() as u64,
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
