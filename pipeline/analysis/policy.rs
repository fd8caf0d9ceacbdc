//! Position against the policy portfolio: for the current portfolio and every model, the exposure per
//! policy line (Σ of its members' weights), the distance from target and whether it lies inside the
//! permitted range; and the active risk against the policy benchmark, whose return in scenario k is
//! b_k = Σ_lines target × return of the line's benchmark series (an asset, or a non-investable series of
//! the reference scenario set). A range breach of the current portfolio is a `warn` check.
//!
//! Reads the config, the market data, both scenario sets, the policy lines' members (resolved before the
//! first LP, `run::validate`) and the portfolios; writes nothing.

use crate::config::{Config, Policy};
use crate::diag::Check;
use crate::ingest::MarketData;
use crate::risk::{self, ActiveRisk};
use crate::scenarios::{self, ScenarioSet};

/// An exposure counts as outside its range only beyond this distance (solver round-off of the models).
pub const RANGE_TOLERANCE: f64 = 1e-6;

/// Calendar days in a year, for the number of observations a year in the scenario window.
const DAYS_PER_YEAR: f64 = 365.25;

/// One policy line as resolved against the data.
#[derive(Debug, Clone)]
pub struct Line {
    pub name: String,
    pub members: Vec<String>,
    pub target: f64,
    pub min: f64,
    pub max: f64,
    pub benchmark: String,
}

/// One portfolio against the policy.
#[derive(Debug, Clone)]
pub struct Position {
    pub portfolio: String,
    /// Exposure per line, in line order.
    pub exposure: Vec<f64>,
    /// Names of the lines whose exposure lies outside [min, max].
    pub breaches: Vec<String>,
    pub active: ActiveRisk,
}

impl Position {
    /// The lines this portfolio lies outside of, each with its exposure, in line order.
    pub fn breached<'a>(&'a self, lines: &'a [Line]) -> impl Iterator<Item = (&'a Line, f64)> + 'a {
        lines
            .iter()
            .zip(&self.exposure)
            .filter(|(l, _)| self.breaches.contains(&l.name))
            .map(|(l, e)| (l, *e))
    }
}

/// Everything the pack reports about the policy.
#[derive(Debug, Clone)]
pub struct PolicyReport {
    pub lines: Vec<Line>,
    /// Target weight per benchmark series (lines sharing a series add up), in first-named order.
    pub benchmark_weights: Vec<(String, f64)>,
    /// Policy benchmark return per scenario, b_k.
    pub benchmark_returns: Vec<f64>,
    /// Horizons in a year, the annualisation factor of tracking error ([`horizons_per_year`]).
    pub horizons_per_year: f64,
    pub positions: Vec<Position>,
    pub ranges_as_limits: bool,
}

/// The policy report, or `None` without a policy. `members` are the lines' asset indices.
pub fn report(
    cfg: &Config,
    data: &MarketData,
    set: &ScenarioSet,
    reference: &ScenarioSet,
    members: &[Vec<usize>],
    portfolios: &[(String, Vec<f64>)],
) -> Option<PolicyReport> {
    let policy = cfg.policy.as_ref()?;
    let benchmark_weights = benchmark_weights(policy);
    let b = scenarios::policy_benchmark(set, reference, policy);
    let per_year = horizons_per_year(data, set.horizon);
    let lines = resolved_lines(policy, members, &data.assets);
    let positions = portfolios
        .iter()
        .map(|(name, x)| Position {
            portfolio: name.clone(),
            exposure: exposures(members, x),
            breaches: breaches(&lines, &exposures(members, x)),
            active: risk::active(set, x, &b, &cfg.levels, cfg.confidence, per_year),
        })
        .collect();
    Some(PolicyReport {
        lines,
        benchmark_weights,
        benchmark_returns: b,
        horizons_per_year: per_year,
        positions,
        ranges_as_limits: policy.ranges_as_limits,
    })
}

fn resolved_lines(policy: &Policy, members: &[Vec<usize>], assets: &[String]) -> Vec<Line> {
    policy
        .lines
        .iter()
        .zip(members)
        .map(|(l, m)| Line {
            name: l.name.clone(),
            members: m.iter().map(|&i| assets[i].clone()).collect(),
            target: l.target,
            min: l.min,
            max: l.max,
            benchmark: l.benchmark.clone(),
        })
        .collect()
}

/// Σ target per series, series in the order the lines first name them ([`Policy::benchmark_weights`]).
pub fn benchmark_weights(policy: &Policy) -> Vec<(String, f64)> {
    policy.benchmark_weights()
}

/// Exposure per line: Σ of the members' weights.
pub fn exposures(members: &[Vec<usize>], x: &[f64]) -> Vec<f64> {
    members
        .iter()
        .map(|m| m.iter().map(|&i| x[i]).sum())
        .collect()
}

fn breaches(lines: &[Line], exposure: &[f64]) -> Vec<String> {
    lines
        .iter()
        .zip(exposure)
        .filter(|(l, e)| **e < l.min - RANGE_TOLERANCE || **e > l.max + RANGE_TOLERANCE)
        .map(|(l, _)| l.name.clone())
        .collect()
}

/// The number of scenario horizons in a year: observations a year in the scenario window — (rows − 1)
/// over the calendar years between its first and last date (365.25 days each) — divided by the horizon
/// in observations. Tracking error is annualised by √ of this number (square-root-of-time rule). Without
/// prices (a scenario file alone) the calendar gives it at a monthly or quarterly frequency (12 or 4
/// observations a year); at a daily one it is unknown (NaN: nothing is annualised).
pub fn horizons_per_year(data: &MarketData, horizon: usize) -> f64 {
    let (Some(first), Some(last)) = (data.dates.first(), data.dates.last()) else {
        return match data.frequency {
            crate::config::Frequency::Monthly => 12.0 / horizon as f64,
            crate::config::Frequency::Quarterly => 4.0 / horizon as f64,
            crate::config::Frequency::Daily => f64::NAN,
        };
    };
    let years = (*last - *first).num_days() as f64 / DAYS_PER_YEAR;
    (data.dates.len() - 1) as f64 / years / horizon as f64
}

/// The checks of the policy: a `warn` per range breach of the current portfolio with its figures, a
/// `pass` when it lies inside every range, and a note when no policy is configured.
pub fn checks(report: Option<&PolicyReport>) -> Vec<Check> {
    let Some(r) = report else {
        return vec![Check::pass(
            "policy.not_configured",
            "no policy portfolio is configured (config section `policy`): no targets, ranges, policy benchmark or active risk in this pack",
        )];
    };
    let Some(current) = r.positions.iter().find(|p| p.portfolio == "current") else {
        return vec![];
    };
    let outside: Vec<String> = current
        .breached(&r.lines)
        .map(|(l, e)| {
            format!(
                "`{}` at {:.2}% (target {:.2}%, range {:.2}%–{:.2}%)",
                l.name,
                e * 100.0,
                l.target * 100.0,
                l.min * 100.0,
                l.max * 100.0
            )
        })
        .collect();
    vec![if outside.is_empty() {
        Check::pass(
            "policy.current_ranges",
            format!(
                "the current portfolio lies inside all {} policy ranges",
                r.lines.len()
            ),
        )
    } else {
        Check::warn(
            "policy.current_ranges",
            format!(
                "the current portfolio is outside its policy range in {}",
                outside.join(", ")
            ),
        )
    }]
}
