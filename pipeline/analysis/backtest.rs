//! Walk-forward (out-of-sample) backtest of the three models.
//!
//! At each month-end m in the backtest range, scenarios are rebuilt from prices dated on or before m only
//! (the same lookback, horizon, step and probabilities as the live run), every family is solved on the
//! live run's constraints by the run's own function (`models::solve_all`), and each portfolio is held to
//! the next month-end, where its realised return is measured. The turnover limit and the rules "times current" / "plus current" refer to the fund's
//! current holdings as the reference portfolio at every date, so months are independent and are solved in
//! parallel; the reported turnover is the trading actually implied between consecutive months' weights.
//! Each rebalance pays its transaction cost, Σ rate_i·|w_i − drifted w_i| of the wealth at that date
//! (the live run's cost rates; the first month is measured from the reference holdings, and costs
//! nothing without them), so cumulative wealth is net of costs.
//! The predicted VaR of each month is then backtested against the realised losses (see `vartest`).
//! With a policy, each month's realised policy-benchmark return Σ target·(series return) is measured over
//! the same month, and each model's ex-post tracking error is the sample standard deviation of its monthly
//! active returns (realised net of costs minus benchmark; Grinold & Kahn, "Active Portfolio Management",
//! ch. 3), annualised by √12.
//! With liabilities, each month's realised surplus return on assets is the realised return less the
//! liability proxy's realised return over today's funded ratio, r − ℓ/F (F is held at today's figure: the
//! pack has no history of the liabilities' value). On the surplus basis (`risk.basis: surplus`) each
//! month's models and predicted VaR are the surplus ones (`resolve::solve`), so the VaR exceptions, the
//! Kupiec and Christoffersen tests and the mean prediction error compare them with the realised surplus
//! returns; the daily traffic-light test stays on the assets' own daily losses.

use super::resolve::{self, History};
use super::vartest::{self, LrTest, Zone};
use crate::config::Config;
use crate::ingest::MarketData;
use crate::models::{self, Family, FeasibleSet, Premises, Status};
use crate::risk;
use crate::scenarios;
use chrono::{Datelike, Months, NaiveDate};
use rayon::prelude::*;
use serde::Serialize;

/// Observations in the daily VaR traffic-light test (Basel Committee 1996: 250 trading days).
pub const DAILY_OBSERVATIONS: usize = 250;
/// Level of the daily VaR in the traffic-light test (Basel Committee 1996: 99%).
pub const DAILY_LEVEL: f64 = 0.99;

/// One model's decision at one month-end and what followed.
#[derive(Debug, Clone, Serialize)]
pub struct TrackRow {
    pub date: NaiveDate,
    pub next: NaiveDate,
    pub status: String,
    pub weights: Option<Vec<f64>>,
    pub predicted_return: Option<f64>,
    pub predicted_var: Option<f64>,
    pub predicted_cvar: Option<f64>,
    pub realised_return: Option<f64>,
    /// Σ|w_m − drifted w_{m−1}|; the first month is measured from the reference holdings.
    pub turnover: Option<f64>,
    /// The rebalance's transaction cost Σ rate_i·|w_m,i − drifted w_{m−1},i|, as a fraction of the
    /// wealth at that date (None where turnover is).
    pub cost: Option<f64>,
    /// The month's return after paying the rebalance's cost: (1 − cost)(1 + realised) − 1.
    pub realised_return_net: Option<f64>,
    /// Cumulative wealth net of costs (1 at the start).
    pub wealth: f64,
    pub exception: Option<bool>,
    /// The month's active return against the policy benchmark: `realised_return_net` minus the
    /// benchmark's realised return (None without a policy or where either is missing).
    pub active_return: Option<f64>,
    /// The month's realised surplus return on assets, `realised_return` − ℓ/F (None without liabilities or
    /// where the proxy has no price).
    pub realised_surplus_return: Option<f64>,
}

impl TrackRow {
    /// The realised return on the basis the models use: the surplus's on the surplus basis.
    fn realised_on(&self, surplus: bool) -> Option<f64> {
        if surplus {
            self.realised_surplus_return
        } else {
            self.realised_return
        }
    }
}

/// A model's realised (ex-post) active risk against the policy benchmark over the backtest.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct ExPost {
    /// Months with both a realised return and a benchmark return.
    pub months: usize,
    /// Mean monthly active return, a fraction of value per month.
    pub mean_active_return: f64,
    /// Sample standard deviation (n − 1) of the monthly active returns, a fraction of value per month.
    pub tracking_error: f64,
    /// `tracking_error` × √12 (monthly observations, twelve a year), a fraction of value, annualised.
    pub tracking_error_annualised: f64,
}

/// The daily 99% VaR traffic-light test of one model.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct DailyCheck {
    /// Trading days tested (a count).
    pub observations: usize,
    /// Days whose loss exceeded the predicted daily 99% VaR (a count).
    pub exceptions: usize,
    /// Binomial probability of at most that many exceptions at a 1% rate, a fraction.
    pub cumulative_probability: f64,
    /// The Basel traffic-light zone of the exception count.
    pub zone: Zone,
    /// First day tested (YYYY-MM-DD).
    pub start: NaiveDate,
    /// Last day tested (YYYY-MM-DD).
    pub end: NaiveDate,
}

/// One model's track record.
#[derive(Debug, Clone, Serialize)]
pub struct Track {
    pub model: &'static str,
    pub rows: Vec<TrackRow>,
    pub observations: usize,
    pub exceptions: usize,
    pub expected_exceptions: f64,
    pub kupiec: Option<LrTest>,
    pub christoffersen: Option<LrTest>,
    /// Mean of predicted − realised return over the months with both.
    pub mean_prediction_error: Option<f64>,
    pub final_wealth: f64,
    /// Transaction costs paid over the backtest, as a fraction of the starting wealth (each rebalance's
    /// cost times the wealth it was paid from).
    pub total_cost: f64,
    pub daily: Option<DailyCheck>,
    /// Ex-post tracking error against the policy benchmark (None without a policy or with fewer than
    /// two months of active returns).
    pub ex_post: Option<ExPost>,
}

/// The backtest of all models.
#[derive(Debug, Clone, Serialize)]
pub struct Backtest {
    pub confidence: f64,
    pub rebalances: Vec<NaiveDate>,
    pub skipped: Vec<(NaiveDate, String)>,
    pub tracks: Vec<Track>,
    /// The policy benchmark's realised return of each rebalance month (aligned with `rebalances`; None
    /// without a policy, or in a month where a benchmark series has no price).
    pub benchmark: Option<Vec<Option<f64>>>,
    /// The liability proxy's realised return of each rebalance month (aligned with `rebalances`; None
    /// without liabilities, or in a month where the proxy has no price).
    pub liabilities: Option<Vec<Option<f64>>>,
}

/// The liabilities' side of a track: the proxy's realised return each month, today's funded ratio, and
/// whether the models work on the surplus basis.
#[derive(Clone, Copy)]
struct Liabilities<'a> {
    proxy: &'a [Option<f64>],
    funded: f64,
    surplus: bool,
}

/// The month-ends of the full history: the last observation of every calendar month.
pub fn month_ends(dates: &[NaiveDate]) -> Vec<usize> {
    (0..dates.len())
        .filter(|&i| i + 1 == dates.len() || dates[i + 1].month() != dates[i].month())
        .collect()
}

/// A month's decision: weights and predictions per model, or why the month was skipped.
struct Month {
    row: usize,
    next: usize,
    decisions: Result<Vec<Decision>, String>,
}

struct Decision {
    status: Status,
    weights: Option<Vec<f64>>,
    tail: Option<(f64, f64, f64)>,
}

/// Runs the backtest; `None` when it is switched off or no month-end falls in range.
pub fn run(cfg: &Config, data: &MarketData, live: &FeasibleSet) -> Option<Backtest> {
    let years = cfg.analysis.backtest_years;
    if years == 0 {
        return None;
    }
    let start = data.as_of.checked_sub_months(Months::new(12 * years))?;
    let ends = month_ends(&data.full_dates);
    let pairs: Vec<(usize, usize)> = ends
        .windows(2)
        .map(|w| (w[0], w[1]))
        .filter(|(m, _)| data.full_dates[*m] >= start)
        .collect();
    if pairs.is_empty() {
        return None;
    }
    let months: Vec<Month> = pairs
        .par_iter()
        .map(|&(m, n)| Month {
            row: m,
            next: n,
            decisions: decide(cfg, data, live, m),
        })
        .collect();
    Some(assemble(cfg, data, live, &months))
}

/// Solves every family with data up to row `m` only, as the run solves them ([`models::solve_all`]).
fn decide(
    cfg: &Config,
    data: &MarketData,
    live: &FeasibleSet,
    m: usize,
) -> Result<Vec<Decision>, String> {
    let (dates, prices, reference, fs) = window(cfg, data, live, m)?;
    let history = History {
        dates: &dates,
        prices: &prices,
        reference: &reference,
        feasible: &fs,
    };
    let (set, solution) = resolve::solve(cfg, data, &history, Premises::Establish)?;
    let c = cfg.confidence;
    Ok(solution
        .families
        .into_iter()
        .map(|f| {
            let tail = f.outcome.weights.as_ref().map(|w| {
                let pr = risk::profile(&set, w, &[c], c);
                (pr.expected_return, pr.at(c).var, pr.at(c).cvar)
            });
            Decision {
                status: f.outcome.status,
                weights: f.outcome.weights,
                tail,
            }
        })
        .collect())
}

type Window = (Vec<NaiveDate>, Vec<Vec<f64>>, Vec<Vec<f64>>, FeasibleSet);

/// The lookback window ending at row `m`; assets without a full price series there get zero weight.
fn window(cfg: &Config, data: &MarketData, live: &FeasibleSet, m: usize) -> Result<Window, String> {
    let end = data.full_dates[m];
    let from = end
        .checked_sub_months(Months::new(12 * cfg.scenarios.lookback_years))
        .ok_or("date range")?;
    let s = data.full_dates.partition_point(|d| *d < from);
    if m + 1 - s <= cfg.scenarios.horizon + crate::ingest::MIN_SCENARIOS {
        return Err(format!(
            "history before {end} is too short for a {}-year lookback",
            cfg.scenarios.lookback_years
        ));
    }
    let mut fs = live.clone();
    let mut prices = Vec::with_capacity(data.assets.len());
    for (i, p) in data.full_prices.iter().enumerate() {
        let slice = &p[s..=m];
        if slice.iter().all(|v| v.is_finite()) {
            prices.push(slice.to_vec());
        } else {
            fs.lower[i] = 0.0;
            fs.upper[i] = 0.0;
            prices.push(vec![1.0; slice.len()]);
        }
    }
    let reference = data
        .reference_full_prices
        .iter()
        .map(|p| p[s..=m].to_vec())
        .collect();
    Ok((data.full_dates[s..=m].to_vec(), prices, reference, fs))
}

fn realised(data: &MarketData, w: &[f64], from: usize, to: usize) -> (f64, Vec<f64>) {
    let r: Vec<f64> = data
        .full_prices
        .iter()
        .map(|p| {
            let v = p[to] / p[from] - 1.0;
            if v.is_finite() { v } else { 0.0 }
        })
        .collect();
    (models::dot(w, &r), r)
}

fn assemble(cfg: &Config, data: &MarketData, live: &FeasibleSet, months: &[Month]) -> Backtest {
    let skipped = months
        .iter()
        .filter_map(|m| {
            m.decisions
                .as_ref()
                .err()
                .map(|e| (data.full_dates[m.row], e.clone()))
        })
        .collect();
    let benchmark = cfg.policy.as_ref().map(|policy| {
        let mix = super::policy::benchmark_weights(policy);
        months
            .iter()
            .map(|m| benchmark_realised(data, &mix, m.row, m.next))
            .collect::<Vec<_>>()
    });
    let proxy = liabilities_realised(cfg, data, months);
    let side = proxy
        .as_deref()
        .zip(super::liabilities::funded_ratio(cfg))
        .map(|(proxy, funded)| Liabilities {
            proxy,
            funded,
            surplus: cfg.basis == crate::config::Basis::Surplus,
        });
    let tracks = (0..Family::ALL.len())
        .map(|k| {
            let others = (benchmark.as_deref(), side);
            track(cfg, data, months, k, &live.cost_rates, others)
        })
        .collect();
    Backtest {
        confidence: cfg.confidence,
        rebalances: months.iter().map(|m| data.full_dates[m.row]).collect(),
        skipped,
        tracks,
        benchmark,
        liabilities: proxy,
    }
}

/// The liability proxy's realised return of each month, P[next]/P[row] − 1; None without liabilities.
fn liabilities_realised(
    cfg: &Config,
    data: &MarketData,
    months: &[Month],
) -> Option<Vec<Option<f64>>> {
    let proxy = &cfg.liabilities.as_ref()?.proxy;
    let j = data.reference.iter().position(|a| a == proxy)?;
    let p = &data.reference_full_prices[j];
    Some(
        months
            .iter()
            .map(|m| Some(p[m.next] / p[m.row] - 1.0).filter(|r| r.is_finite()))
            .collect(),
    )
}

/// The policy benchmark's realised return from row `from` to row `to`: Σ weight × (P[to]/P[from] − 1)
/// over its series, each an asset of the universe or a non-investable series; None if a price is missing.
fn benchmark_realised(
    data: &MarketData,
    mix: &[(String, f64)],
    from: usize,
    to: usize,
) -> Option<f64> {
    mix.iter()
        .map(|(series, w)| {
            let p = match data.assets.iter().position(|a| a == series) {
                Some(i) => &data.full_prices[i],
                None => {
                    let j = data.reference.iter().position(|a| a == series)?;
                    &data.reference_full_prices[j]
                }
            };
            let r = p[to] / p[from] - 1.0;
            r.is_finite().then_some(w * r)
        })
        .sum()
}

/// Mean, sample standard deviation and its √12 annualisation of the monthly active returns.
fn ex_post(rows: &[TrackRow]) -> Option<ExPost> {
    let a: Vec<f64> = rows.iter().filter_map(|r| r.active_return).collect();
    if a.len() < 2 {
        return None;
    }
    let n = a.len() as f64;
    let mean = a.iter().sum::<f64>() / n;
    let te = (a.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    Some(ExPost {
        months: a.len(),
        mean_active_return: mean,
        tracking_error: te,
        tracking_error_annualised: te * 12f64.sqrt(),
    })
}

/// The money side of one model's track: wealth net of costs, the weights held (drifted since the last
/// rebalance) and the costs paid so far.
struct Account {
    wealth: f64,
    held: Option<Vec<f64>>,
    total_cost: f64,
}

/// One month's trading and holding as the account records it.
struct Step {
    turnover: Option<f64>,
    cost: Option<f64>,
    realised: Option<f64>,
    realised_net: Option<f64>,
}

impl Account {
    /// Rebalances into `weights` (paying the cost from the drifted weights) and holds them from row
    /// `from` to row `to`; no weights: no trade and no return.
    fn step(
        &mut self,
        data: &MarketData,
        rates: &[f64],
        weights: Option<&[f64]>,
        (from, to): (usize, usize),
    ) -> Step {
        let (turnover, cost) = match (weights, &self.held) {
            (Some(w), Some(h)) => (
                Some(models::turnover(w, h)),
                Some(rebalance_cost(rates, w, h)),
            ),
            _ => (None, None),
        };
        let realised = weights.map(|w| {
            let (rp, drift) = held_to_next(data, w, from, to);
            self.held = Some(drift);
            rp
        });
        let paid = cost.unwrap_or(0.0);
        self.total_cost += paid * self.wealth;
        self.wealth *= 1.0 - paid;
        self.wealth *= 1.0 + realised.unwrap_or(0.0);
        Step {
            turnover,
            cost,
            realised,
            realised_net: realised.map(|r| (1.0 - paid) * (1.0 + r) - 1.0),
        }
    }
}

fn track(
    cfg: &Config,
    data: &MarketData,
    months: &[Month],
    k: usize,
    rates: &[f64],
    (benchmark, liabilities): (Option<&[Option<f64>]>, Option<Liabilities>),
) -> Track {
    let mut rows = Vec::with_capacity(months.len());
    let mut account = Account {
        wealth: 1.0,
        held: data.holdings.clone(),
        total_cost: 0.0,
    };
    for (i, m) in months.iter().enumerate() {
        let d = m.decisions.as_ref().ok().map(|v| &v[k]);
        let weights = d.and_then(|d| d.weights.clone());
        let step = account.step(data, rates, weights.as_deref(), (m.row, m.next));
        let tail = d.and_then(|d| d.tail);
        let surplus = liabilities.and_then(|l| Some(step.realised? - l.proxy[i]? / l.funded));
        let on_basis = if liabilities.is_some_and(|l| l.surplus) {
            surplus
        } else {
            step.realised
        };
        rows.push(TrackRow {
            date: data.full_dates[m.row],
            next: data.full_dates[m.next],
            status: d.map_or("skipped".to_string(), |d| d.status.word().to_string()),
            weights,
            predicted_return: tail.map(|t| t.0),
            predicted_var: tail.map(|t| t.1),
            predicted_cvar: tail.map(|t| t.2),
            realised_return: step.realised,
            turnover: step.turnover,
            cost: step.cost,
            realised_return_net: step.realised_net,
            wealth: account.wealth,
            exception: tail.zip(on_basis).map(|((_, var, _), r)| -r > var),
            active_return: step
                .realised_net
                .zip(benchmark.and_then(|b| b[i]))
                .map(|(r, b)| r - b),
            realised_surplus_return: surplus,
        });
    }
    let mut t = summarise(cfg, data, Family::ALL[k].name(), rows);
    t.total_cost = account.total_cost;
    t
}

/// The realised return of `w` held from row `from` to row `to`, and the weights it has drifted to.
fn held_to_next(data: &MarketData, w: &[f64], from: usize, to: usize) -> (f64, Vec<f64>) {
    let (rp, r) = realised(data, w, from, to);
    let drift = w
        .iter()
        .zip(&r)
        .map(|(x, ri)| x * (1.0 + ri) / (1.0 + rp))
        .collect();
    (rp, drift)
}

/// Σ rate_i·|w_i − held_i|: the one-way cost of trading from `held` to `w` (rates empty: free).
fn rebalance_cost(rates: &[f64], w: &[f64], held: &[f64]) -> f64 {
    rates
        .iter()
        .zip(w.iter().zip(held))
        .map(|(r, (a, b))| r * (a - b).abs())
        .sum()
}

fn summarise(cfg: &Config, data: &MarketData, model: &'static str, rows: Vec<TrackRow>) -> Track {
    let surplus = cfg.basis == crate::config::Basis::Surplus;
    let hits: Vec<bool> = rows.iter().filter_map(|r| r.exception).collect();
    let exceptions = hits.iter().filter(|h| **h).count();
    let p = 1.0 - cfg.confidence;
    let gaps: Vec<f64> = rows
        .iter()
        .filter_map(|r| Some(r.predicted_return? - r.realised_on(surplus)?))
        .collect();
    // The traffic light counts daily exceptions: on month-end (quarter-end) observations it is not run.
    let daily = if cfg.analysis.daily_var_check && data.frequency == crate::config::Frequency::Daily
    {
        daily_check(cfg, data, &rows)
    } else {
        None
    };
    Track {
        model,
        observations: hits.len(),
        exceptions,
        expected_exceptions: p * hits.len() as f64,
        kupiec: (!hits.is_empty()).then(|| vartest::kupiec(exceptions, hits.len(), p)),
        christoffersen: vartest::christoffersen(&hits),
        mean_prediction_error: (!gaps.is_empty())
            .then(|| gaps.iter().sum::<f64>() / gaps.len() as f64),
        final_wealth: rows.last().map_or(1.0, |r| r.wealth),
        total_cost: 0.0,
        ex_post: ex_post(&rows),
        rows,
        daily,
    }
}

/// Daily 99% VaR of the weights in force on each of the last 250 observations, from one-day scenarios of
/// the lookback window ending the day before, against that day's realised loss (Basel Committee 1996).
fn daily_check(cfg: &Config, data: &MarketData, rows: &[TrackRow]) -> Option<DailyCheck> {
    let last = data.full_dates.len() - 1;
    let first = last.checked_sub(DAILY_OBSERVATIONS - 1)?;
    let opts = crate::config::ScenarioOptions {
        horizon: 1,
        step: 1,
        ..cfg.scenarios.clone()
    };
    let mut exceptions = 0;
    for day in first..=last {
        let prev = data.full_dates[day - 1];
        let w = rows
            .iter()
            .rev()
            .find(|r| r.date <= prev)?
            .weights
            .as_ref()?;
        let from = prev.checked_sub_months(Months::new(12 * cfg.scenarios.lookback_years))?;
        let s = data.full_dates.partition_point(|d| *d < from);
        let prices: Vec<Vec<f64>> = data
            .full_prices
            .iter()
            .map(|p| {
                p[s..day]
                    .iter()
                    .map(|v| if v.is_finite() { *v } else { 1.0 })
                    .collect()
            })
            .collect();
        let set =
            scenarios::from_prices(&data.assets, &data.full_dates[s..day], &prices, &opts).ok()?;
        let var = risk::var_cvar(
            &set.portfolio_returns(w)
                .iter()
                .map(|r| -r)
                .collect::<Vec<_>>(),
            &set.probabilities,
            DAILY_LEVEL,
        )
        .var;
        let (r, _) = realised(data, w, day - 1, day);
        exceptions += usize::from(-r > var);
    }
    let p = 1.0 - DAILY_LEVEL;
    Some(DailyCheck {
        observations: DAILY_OBSERVATIONS,
        exceptions,
        cumulative_probability: vartest::cumulative_probability(exceptions, DAILY_OBSERVATIONS, p),
        zone: vartest::zone(exceptions, DAILY_OBSERVATIONS, p),
        start: data.full_dates[first],
        end: data.full_dates[last],
    })
}
