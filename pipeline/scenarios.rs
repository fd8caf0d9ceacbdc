//! Stage 2, scenarios: overlapping horizon windows of the price history and their probabilities.
//!
//! Scenario k is the simple return over h observations, r_k = P[t_k + h] / P[t_k] − 1, per asset
//! (historical simulation). Windows are anchored at the last observation (as-of) and step back by `step`,
//! so the newest scenario always ends at as-of. Probabilities are equal, or decay exponentially with age:
//! p_k ∝ 2^(−age_k / half_life), age in observations between the window's end and as-of.
//!
//! With a scenario file (`data.scenarios`) the set is the file's matrix as ingest laid it out ([`from_file`]):
//! rows are the file's scenarios with their labels and probabilities, taken over without a copy.

use crate::config::ScenarioOptions;
use crate::error::{Error, Result};
use crate::ingest::MarketData;
use chrono::NaiveDate;
use rayon::prelude::*;

/// Return-matrix size (S·N entries) from which per-scenario work is split across threads.
pub const PARALLEL_FROM: usize = 1 << 20;
/// Scenarios per parallel task; fixed, so chunked sums never depend on the thread count.
pub const ROWS_PER_TASK: usize = 2048;

/// Largest scenario return magnitude the models accept. Ingest bounds every asset's price range by
/// `ingest::quality::MAX_PRICE_RANGE` = 10^6, which keeps every return below this; a return beyond it (or
/// not finite) would make LP coefficients and sums over scenarios meaningless or infinite.
pub const MAX_ABS_RETURN: f64 = 1e6;

/// The scenario set: `returns` is row-major, one row of `assets.len()` returns per scenario.
#[derive(Debug, Clone)]
pub struct ScenarioSet {
    pub assets: Vec<String>,
    /// Window start and end of every scenario cut from prices; empty for a scenario file's set.
    pub starts: Vec<NaiveDate>,
    pub ends: Vec<NaiveDate>,
    /// The scenario file's label of every row; empty for windows cut from prices.
    pub labels: Vec<String>,
    pub returns: Vec<f64>,
    pub probabilities: Vec<f64>,
    pub equal_probabilities: bool,
    pub horizon: usize,
    pub step: usize,
}

impl ScenarioSet {
    /// Number of scenarios S.
    pub fn len(&self) -> usize {
        self.probabilities.len()
    }

    /// Whether there are no scenarios.
    pub fn is_empty(&self) -> bool {
        self.probabilities.is_empty()
    }

    /// Number of assets N.
    pub fn width(&self) -> usize {
        self.assets.len()
    }

    /// Row k of the return matrix.
    pub fn row(&self, k: usize) -> &[f64] {
        let n = self.width();
        &self.returns[k * n..(k + 1) * n]
    }

    /// Label of scenario k: `start/end`, or the scenario file's label.
    pub fn label(&self, k: usize) -> String {
        match self.labels.get(k) {
            Some(l) => l.clone(),
            None => format!("{}/{}", self.starts[k], self.ends[k]),
        }
    }

    /// Whether the scenarios come from a scenario file rather than the price history.
    pub fn from_file(&self) -> bool {
        !self.labels.is_empty()
    }

    /// The first return (scenario, asset, value) that is not finite or exceeds [`MAX_ABS_RETURN`] in
    /// magnitude, if any.
    pub fn unusable_return(&self) -> Option<(usize, usize, f64)> {
        let n = self.width().max(1);
        self.returns
            .iter()
            .position(|r| !r.is_finite() || r.abs() > MAX_ABS_RETURN)
            .map(|j| (j / n, j % n, self.returns[j]))
    }

    /// The set with `c_k` taken off every return of scenario k: r_ki − c_k. Since every portfolio's
    /// weights sum to 1, its return on the result is r_k·x − c_k — the surplus return on assets when c_k is
    /// the liabilities' part ℓ_k/F (the surplus basis of the models, `risk.basis: surplus`).
    pub fn less_per_scenario(&self, c: &[f64]) -> ScenarioSet {
        let n = self.width();
        let mut out = self.clone();
        for (k, ck) in c.iter().enumerate().take(self.len()) {
            out.returns[k * n..(k + 1) * n]
                .iter_mut()
                .for_each(|r| *r -= ck);
        }
        out
    }

    /// Probability-weighted mean return per asset, μ_i = Σ_k p_k r_ki.
    pub fn mean(&self) -> Vec<f64> {
        let mut mu = vec![0.0; self.width()];
        for k in 0..self.len() {
            for (m, r) in mu.iter_mut().zip(self.row(k)) {
                *m += self.probabilities[k] * r;
            }
        }
        mu
    }

    /// Portfolio returns per scenario, r_k · x. Large sets are split across threads; each entry is its
    /// own dot product, so the result does not depend on how many threads ran.
    pub fn portfolio_returns(&self, x: &[f64]) -> Vec<f64> {
        let n = self.width();
        if n == 0 {
            return vec![0.0; self.len()];
        }
        // A portfolio holding few of many assets reads only its holdings' cells of each row: fewer cache
        // lines of the matrix than the whole row, which is what a pass over a large set costs.
        let held: Vec<usize> = (0..n).filter(|&i| x[i] != 0.0).collect();
        let sparse = held.len() * SPARSE_BELOW < n;
        let dot = |row: &[f64]| {
            if sparse {
                held.iter().map(|&i| row[i] * x[i]).sum()
            } else {
                dot_lanes(row, x)
            }
        };
        if self.returns.len() < PARALLEL_FROM {
            return self.returns.chunks(n).map(dot).collect();
        }
        let mut out = vec![0.0; self.len()];
        out.par_chunks_mut(ROWS_PER_TASK)
            .zip(self.returns.par_chunks(ROWS_PER_TASK * n))
            .for_each(|(o, rows)| {
                o.iter_mut()
                    .zip(rows.chunks(n))
                    .for_each(|(v, r)| *v = dot(r))
            });
        out
    }

    /// A scenario set from explicit data (tests, benchmarks); probabilities must be positive and sum to 1.
    pub fn from_matrix(
        assets: Vec<String>,
        returns: Vec<f64>,
        probabilities: Vec<f64>,
    ) -> Result<Self> {
        let (n, s) = (assets.len(), probabilities.len());
        if n == 0 || returns.len() != n * s || s == 0 {
            return Err(Error::Scenarios(format!(
                "scenario matrix shape: {} values for {s} scenarios × {n} assets",
                returns.len()
            )));
        }
        if let Some(v) = returns.iter().find(|r| !r.is_finite()) {
            return Err(Error::Scenarios(format!(
                "scenario matrix: return {v} is not a finite number"
            )));
        }
        let total: f64 = probabilities.iter().sum();
        if probabilities.iter().any(|p| !(*p >= 0.0)) || (total - 1.0).abs() > 1e-9 {
            return Err(Error::Scenarios(format!(
                "scenario probabilities must be ≥ 0 and sum to 1 (sum {total})"
            )));
        }
        let day = NaiveDate::from_ymd_opt(2000, 1, 1).expect("valid");
        let equal = probabilities
            .iter()
            .all(|p| (p - probabilities[0]).abs() < 1e-15);
        Ok(ScenarioSet {
            assets,
            starts: vec![day; s],
            ends: vec![day; s],
            labels: vec![],
            returns,
            probabilities,
            equal_probabilities: equal,
            horizon: 1,
            step: 1,
        })
    }
}

/// Builds the scenario set from the market data's window.
pub fn build(data: &MarketData, opts: &ScenarioOptions) -> Result<ScenarioSet> {
    from_prices(&data.assets, &data.dates, &data.prices, opts)
}

/// Builds a scenario set from dated prices (`prices[asset][row]`, rows ascending, no missing values).
pub fn from_prices(
    assets: &[String],
    dates: &[NaiveDate],
    prices: &[Vec<f64>],
    opts: &ScenarioOptions,
) -> Result<ScenarioSet> {
    let rows = dates.len();
    let h = opts.horizon;
    if rows <= h {
        return Err(Error::Scenarios(format!(
            "{rows} observations cannot make a {h}-observation scenario"
        )));
    }
    let mut ends: Vec<usize> = (h..rows).rev().step_by(opts.step).collect();
    ends.reverse();
    let n = assets.len();
    let mut returns = Vec::with_capacity(ends.len() * n);
    for &e in &ends {
        returns.extend(prices.iter().map(|p| p[e] / p[e - h] - 1.0));
    }
    let last = rows - 1;
    let probabilities = match opts.half_life {
        None => vec![1.0 / ends.len() as f64; ends.len()],
        Some(hl) => decayed(ends.iter().map(|&e| (last - e) as f64), hl),
    };
    Ok(ScenarioSet {
        assets: assets.to_vec(),
        starts: ends.iter().map(|&e| dates[e - h]).collect(),
        ends: ends.iter().map(|&e| dates[e]).collect(),
        labels: vec![],
        returns,
        probabilities,
        equal_probabilities: opts.half_life.is_none(),
        horizon: h,
        step: opts.step,
    })
}

/// The universe's and the reference series' scenario sets from a scenario file as ingest read it: the
/// matrices are moved, not copied. Probabilities are the file's (normalised by ingest) or equal; horizon
/// and step are the config's (`scenarios.horizon` says what horizon the file's returns are over).
pub fn from_file(
    table: crate::ingest::scenario_file::ScenarioTable,
    assets: &[String],
    reference: &[String],
    opts: &ScenarioOptions,
) -> (ScenarioSet, ScenarioSet) {
    let s = table.labels.len();
    let equal = table.probabilities.is_none();
    let probabilities = table
        .probabilities
        .unwrap_or_else(|| vec![1.0 / s as f64; s]);
    let set = |names: &[String], returns: Vec<f64>, labels: Vec<String>, p: Vec<f64>| ScenarioSet {
        assets: names.to_vec(),
        starts: vec![],
        ends: vec![],
        labels,
        returns,
        probabilities: p,
        equal_probabilities: equal,
        horizon: opts.horizon,
        step: opts.step,
    };
    let universe = set(
        assets,
        table.returns,
        table.labels.clone(),
        probabilities.clone(),
    );
    let refs = set(reference, table.reference, table.labels, probabilities);
    (universe, refs)
}

/// Exponentially decaying weights p_k ∝ 2^(−age_k / half_life), normalised to sum to 1: the age-weighted
/// historical simulation of Boudoukh, Richardson & Whitelaw (1998, "The best of both worlds", Risk 11(5)),
/// whose weights fall by a factor λ per observation of age, here written with λ = 2^(−1/half_life) so that
/// the weight halves every `half_life` observations (the reference is cited from memory).
pub fn decayed(ages: impl Iterator<Item = f64>, half_life: f64) -> Vec<f64> {
    let raw: Vec<f64> = ages
        .map(|a| (-a * std::f64::consts::LN_2 / half_life).exp())
        .collect();
    let total: f64 = raw.iter().sum();
    raw.iter().map(|w| w / total).collect()
}

/// The scenario returns of the policy's non-investable benchmark series (`data.reference`), cut from the
/// same windows as [`build`]: row k of both sets is the same window. Without such series the set has no
/// columns.
pub fn reference(data: &MarketData, opts: &ScenarioOptions) -> Result<ScenarioSet> {
    from_prices(&data.reference, &data.dates, &data.reference_prices, opts)
}

/// Where a series' scenario returns are: a column of the universe's set or of the reference set.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Column {
    Universe(usize),
    Reference(usize),
}

/// The policy benchmark's return in every scenario, b_k = Σ_series weight × the series' return
/// ([`crate::config::Policy::benchmark_weights`]), each series an asset of `universe` or a non-investable
/// series of `reference` (ingest made sure it is one or the other).
pub fn policy_benchmark(
    universe: &ScenarioSet,
    reference: &ScenarioSet,
    policy: &crate::config::Policy,
) -> Vec<f64> {
    let at = |set: &ScenarioSet, s: &str| set.assets.iter().position(|a| a == s);
    let mix: Vec<(Column, f64)> = policy
        .benchmark_weights()
        .into_iter()
        .map(|(s, w)| {
            let column = match at(universe, &s) {
                Some(i) => Column::Universe(i),
                None => Column::Reference(
                    at(reference, &s).expect("ingest checked every benchmark series"),
                ),
            };
            (column, w)
        })
        .collect();
    mix_returns(universe, reference, &mix)
}

/// The return of a fixed mix of series in every scenario, b_k = Σ_j w_j · s_kj, each series a column of
/// the universe's set or of the reference set (same rows).
pub fn mix_returns(
    universe: &ScenarioSet,
    reference: &ScenarioSet,
    mix: &[(Column, f64)],
) -> Vec<f64> {
    (0..universe.len())
        .map(|k| {
            mix.iter()
                .map(|&(c, w)| match c {
                    Column::Universe(i) => w * universe.row(k)[i],
                    Column::Reference(j) => w * reference.row(k)[j],
                })
                .sum()
        })
        .collect()
}

/// [`ScenarioSet::portfolio_returns`] reads only the held assets' cells when fewer than one asset in this
/// many is held.
pub const SPARSE_BELOW: usize = 8;

/// a·b with eight partial sums, combined in a fixed order at the end: the sums are independent, so the
/// compiler keeps them in vector registers and the loop runs at the speed of memory rather than of one
/// chain of additions, and the result is the same on every run and for any number of threads.
pub fn dot_lanes(a: &[f64], b: &[f64]) -> f64 {
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f64 = ca
        .remainder()
        .iter()
        .zip(cb.remainder())
        .map(|(x, y)| x * y)
        .sum();
    let mut acc = [0.0; 8];
    for (x, y) in ca.zip(cb) {
        for j in 0..8 {
            acc[j] += x[j] * y[j];
        }
    }
    ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7])) + tail
}
