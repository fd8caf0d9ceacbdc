//! Stage 5, analysis: what the three optima alone don't show — the whole trade-off (efficient frontier),
//! crises (the stress set), and out-of-sample evidence (walk-forward backtest with VaR backtests).
//!
//! Reads the market data, the scenario set, the feasible set and the models' portfolios; writes nothing.
//! `currency` splits each portfolio's risk by currency (exposures, CVaR with and without currency moves).
//! `change` compares with the fund's previous pack, which the archive layer finds and hands down as plain
//! data (`change::Past`); the pack writer calls it with this run's results.json value.

pub mod backtest;
pub mod bands;
pub mod change;
pub mod currency;
pub mod frontier;
pub mod liabilities;
pub mod policy;
pub mod resolve;
pub mod stress;
pub mod vartest;

use crate::config::Config;
use crate::diag::Check;
use crate::ingest::MarketData;
use crate::models::FeasibleSet;
use crate::timings;

/// The analysis results of one run.
#[derive(Debug, Clone)]
pub struct Analysis {
    pub frontier: Option<frontier::Frontier>,
    pub shocks: Vec<stress::Shock>,
    pub stress: Vec<stress::StressResult>,
    pub backtest: Option<backtest::Backtest>,
    /// Estimation-error bands of every family's weights (None when switched off).
    pub bands: Option<bands::Bands>,
    /// Every portfolio's currency exposure and the currency share of its CVaR (None without an asset
    /// priced in a foreign currency).
    pub currency: Option<Vec<currency::PortfolioCurrency>>,
}

/// What needs the price history when the scenarios come from a scenario file, and whether a price file
/// given beside it runs the part (`true`) or not even then (`false`: the part re-estimates the scenarios
/// from prices, which are not where the file's scenarios come from).
pub const NEEDS_HISTORY: &[(&str, bool)] = &[
    ("walk-forward backtest", false),
    ("estimation-error bands", false),
    ("currency split of CVaR", false),
    ("historical stress windows", true),
    ("data-quality report on prices", true),
];

/// Computes frontier, stress set, backtest and bands. `portfolios` are (name, weights) of current and each
/// model with an optimum; `defined` are the stress file's shocks, resolved against the data before any LP
/// (`run::prepare_fund`); `seed` seeds the bands' resamples ([`bands::seed_of`] the pack id). `lps` are
/// the problem's LPs as the models left them (the frontier goes on from their cuts).
pub fn analyse(
    cfg: &Config,
    data: &MarketData,
    lps: &mut crate::models::Lps,
    fs: &FeasibleSet,
    portfolios: &[(String, Vec<f64>)],
    defined: Vec<stress::Shock>,
    seed: u64,
) -> Analysis {
    let p = lps.problem();
    let frontier = timings::time("frontier", || {
        frontier::sweep(lps, cfg.analysis.frontier_points)
    });
    let stress_start = std::time::Instant::now();
    let mut shocks = defined;
    let reference = data
        .holdings
        .clone()
        .unwrap_or_else(|| vec![1.0 / data.assets.len() as f64; data.assets.len()]);
    shocks.extend(stress::historical(
        data,
        &reference,
        cfg.scenarios.horizon,
        cfg.stress_windows,
    ));
    liabilities::move_in_windows(cfg, data, &mut shocks);
    let classes: Vec<String> = data.meta.iter().map(|m| m.class.clone()).collect();
    let stress = portfolios
        .iter()
        .map(|(name, w)| stress::replay(name, w, &shocks, &classes, cfg.stress_loss_limit))
        .collect();
    timings::add("stress", stress_start.elapsed());
    // The backtest, the bands and the currency split re-estimate scenarios from prices: not for a
    // scenario file's scenarios (NEEDS_HISTORY).
    let history = !p.set.from_file();
    let backtest = timings::time("backtest", || {
        history.then(|| backtest::run(cfg, data, fs)).flatten()
    });
    let points: Vec<Option<Vec<f64>>> = crate::models::Family::ALL
        .iter()
        .map(|f| {
            portfolios
                .iter()
                .find(|(name, _)| name == f.name())
                .map(|(_, w)| w.clone())
        })
        .collect();
    let bands = timings::time("bands", || {
        history
            .then(|| bands::run(cfg, data, p.set, fs, &points, seed))
            .flatten()
    });
    let currency = history
        .then(|| currency::analyse(cfg, data, p.set, portfolios))
        .flatten();
    Analysis {
        frontier,
        shocks,
        stress,
        backtest,
        bands,
        currency,
    }
}

/// Checks that summarise the analysis for the checks table.
pub fn checks(a: &Analysis, cfg: &Config) -> Vec<Check> {
    let mut out = Vec::new();
    for s in &a.stress {
        if !s.breaches.is_empty() {
            let names: Vec<&str> = s
                .breaches
                .iter()
                .map(|&k| a.shocks[k].name.as_str())
                .collect();
            out.push(Check::warn(
                format!("stress.{}", s.portfolio),
                format!(
                    "{}: stress loss above the limit of {:.1}% in {}",
                    s.portfolio,
                    cfg.stress_loss_limit.unwrap_or(0.0) * 100.0,
                    names.join("; ")
                ),
            ));
        }
    }
    if let Some(b) = &a.backtest {
        for t in &b.tracks {
            let Some(k) = t.kupiec else { continue };
            let msg = format!(
                "{}: {} VaR exceptions in {} months (expected {:.1}); Kupiec LR {:.2}, p = {:.3}",
                t.model,
                t.exceptions,
                t.observations,
                t.expected_exceptions,
                k.statistic,
                k.p_value
            );
            out.push(if k.p_value < 0.05 {
                Check::warn(
                    format!("backtest.{}", t.model),
                    format!("{msg}: the exception rate is rejected at 5%"),
                )
            } else {
                Check::pass(format!("backtest.{}", t.model), msg)
            });
        }
    }
    out
}
