//! Estimation-error bands: how firm each family's weights are when the history behind the scenarios is
//! only one draw of many that could have happened.
//!
//! The daily (per-observation) return vectors of the scenario window are resampled by the stationary
//! bootstrap of Politis & Romano ("The stationary bootstrap", JASA 89(428), 1994): blocks of consecutive
//! observations start at uniformly drawn rows and have geometric lengths with mean L (`analysis.band_block`,
//! default one horizon), wrapping around the end, so the resample keeps short-range dependence and
//! volatility clusters. Each resampled history is turned back into prices, the scenarios are built from it
//! exactly as the run builds them, and every family is solved on it by the run's own function
//! ([`models::solve_all`]) on the run's feasible set and rules. Each resample's portfolio is then evaluated
//! on the original scenarios — the question is how the chosen portfolio behaves, not the resample's own
//! view of it.
//!
//! Reported per family: the 5th, 50th and 95th percentile of every weight, of expected return and of CVaR
//! (linear interpolation between order statistics, Hyndman & Fan 1996 definition 7), how often each asset
//! is held above [`HELD_ABOVE`], and the mean turnover Σ|w* − w| between a resample's weights and the
//! point solution as one stability figure. Resample b draws from its own generator seeded with seed + b,
//! so the bands do not depend on the order threads finish in; the seed comes from the pack id.

use super::resolve::{self, History};
use crate::config::Config;
use crate::ingest::MarketData;
use crate::models::{self, Family, FeasibleSet, Premises};
use crate::random::Rng;
use crate::risk;
use crate::scenarios::ScenarioSet;
use rayon::prelude::*;
use serde::Serialize;

/// A weight above this is "held" in the held-share count (half a percent of the fund).
pub const HELD_ABOVE: f64 = 0.005;

/// The three percentiles every band reports.
pub const PERCENTILES: [f64; 3] = [0.05, 0.50, 0.95];

/// The bands of every family.
#[derive(Debug, Clone, Serialize)]
pub struct Bands {
    /// Resamples drawn (B).
    pub resamples: usize,
    /// Mean block length of the stationary bootstrap, in observations.
    pub block_length: f64,
    /// Seed of resample 0 (resample b uses seed + b).
    pub seed: u64,
    pub models: Vec<FamilyBands>,
}

/// One family's bands over the resamples where it had an optimum.
#[derive(Debug, Clone, Serialize)]
pub struct FamilyBands {
    pub model: &'static str,
    /// Resamples with an optimal solution (the percentiles are over these).
    pub solved: usize,
    /// Per asset, its weight's [p5, p50, p95].
    pub weights: Vec<[f64; 3]>,
    /// Expected return on the original scenarios, [p5, p50, p95].
    pub expected_return: [f64; 3],
    /// CVaR at the model level on the original scenarios, [p5, p50, p95].
    pub cvar: [f64; 3],
    /// Per asset, the share of solved resamples holding it above [`HELD_ABOVE`].
    pub held_share: Vec<f64>,
    /// Mean Σ|w* − w| between each resample's weights and the point solution (None without one).
    pub mean_turnover: Option<f64>,
}

/// The seed of a pack's bands: the pack id's first 16 hex digits (0 when it has none).
pub fn seed_of(pack_id: &str) -> u64 {
    pack_id
        .get(..16)
        .and_then(|h| u64::from_str_radix(h, 16).ok())
        .unwrap_or(0)
}

/// Row indices 0..n of one stationary-bootstrap resample of length `len`: a block starts at a uniform row
/// with probability `1/mean_block` (always at the first), else the next row follows, wrapping past n − 1.
pub fn stationary_indices(rng: &mut Rng, n: usize, len: usize, mean_block: f64) -> Vec<usize> {
    let p = 1.0 / mean_block;
    let mut out = Vec::with_capacity(len);
    let mut i = rng.below(n);
    for t in 0..len {
        if t > 0 {
            i = if rng.uniform() < p {
                rng.below(n)
            } else {
                (i + 1) % n
            };
        }
        out.push(i);
    }
    out
}

/// Percentile `q` of `values` (sorted ascending, not empty) by linear interpolation between the order
/// statistics at positions (n − 1)·q (Hyndman & Fan 1996, definition 7).
pub fn percentile(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q;
    let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

fn band(mut values: Vec<f64>) -> [f64; 3] {
    if values.is_empty() {
        return [f64::NAN; 3];
    }
    values.sort_by(f64::total_cmp);
    PERCENTILES.map(|q| percentile(&values, q))
}

/// One resample's optimal weights per family (None where a family had no optimum).
type Draw = Vec<Option<Vec<f64>>>;

/// The bands, or None when they are switched off (`analysis.band_resamples: 0`). `points` are the
/// families' point solutions in [`Family::ALL`] order.
pub fn run(
    cfg: &Config,
    data: &MarketData,
    set: &ScenarioSet,
    fs: &FeasibleSet,
    points: &[Option<Vec<f64>>],
    seed: u64,
) -> Option<Bands> {
    let b = cfg.analysis.band_resamples;
    if b == 0 || data.dates.len() < 3 {
        return None;
    }
    let block = cfg
        .analysis
        .band_block
        .unwrap_or(cfg.scenarios.horizon as f64);
    let daily = Daily {
        universe: daily_returns(&data.prices),
        reference: daily_returns(&data.reference_prices),
    };
    let premises = premises_from(points);
    let draws: Vec<Draw> = (0..b)
        .into_par_iter()
        .map(|k| {
            let seed = seed.wrapping_add(k as u64);
            redraw(cfg, data, fs, &daily, block, seed, premises)
        })
        .collect();
    let mu = set.mean();
    let models = Family::ALL
        .iter()
        .enumerate()
        .map(|(f, family)| summarise(cfg, set, &mu, family, &draws, f, points[f].as_deref()))
        .collect();
    Some(Bands {
        resamples: b,
        block_length: block,
        seed,
        models,
    })
}

/// What the resamples may take as known of X: a point optimum is a portfolio of X the run verified, so X
/// is not empty and the resamples skip the feasibility LP ([`Premises::Shown`]); without one they
/// establish it as the run does.
fn premises_from(points: &[Option<Vec<f64>>]) -> Premises {
    if points.iter().any(Option::is_some) {
        Premises::Shown
    } else {
        Premises::Establish
    }
}

/// The window's per-observation returns, `[row][series]`, of the universe and of the reference series.
struct Daily {
    universe: Vec<Vec<f64>>,
    reference: Vec<Vec<f64>>,
}

/// Per-observation returns `daily[row][asset]` = P[row+1]/P[row] − 1 of the window's prices.
fn daily_returns(prices: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let rows = prices.first().map_or(0, Vec::len);
    (0..rows.saturating_sub(1))
        .map(|t| prices.iter().map(|p| p[t + 1] / p[t] - 1.0).collect())
        .collect()
}

/// Draws one resampled history (the universe and the policy's non-investable series on the same rows),
/// and solves every family on it as the run does ([`resolve::solve`]).
fn redraw(
    cfg: &Config,
    data: &MarketData,
    fs: &FeasibleSet,
    daily: &Daily,
    block: f64,
    seed: u64,
    premises: Premises,
) -> Draw {
    let mut rng = Rng::from_seed(seed);
    let n = daily.universe.len();
    let rows = stationary_indices(&mut rng, n, n, block);
    let prices = rebuilt(&data.prices, &daily.universe, &rows);
    let reference = rebuilt(&data.reference_prices, &daily.reference, &rows);
    let history = History {
        dates: &data.dates,
        prices: &prices,
        reference: &reference,
        feasible: fs,
    };
    match resolve::solve(cfg, data, &history, premises) {
        Ok((_, solution)) => solution
            .families
            .into_iter()
            .map(|f| match f.outcome.status {
                models::Status::Optimal => f.outcome.weights,
                _ => None,
            })
            .collect(),
        Err(_) => vec![None; Family::ALL.len()],
    }
}

/// Price paths from each series' first price compounded by the resampled rows' returns.
fn rebuilt(prices: &[Vec<f64>], daily: &[Vec<f64>], rows: &[usize]) -> Vec<Vec<f64>> {
    prices
        .iter()
        .enumerate()
        .map(|(a, p)| {
            let mut path = Vec::with_capacity(rows.len() + 1);
            path.push(p[0]);
            for &r in rows {
                path.push(path[path.len() - 1] * (1.0 + daily[r][a]));
            }
            path
        })
        .collect()
}

fn summarise(
    cfg: &Config,
    set: &ScenarioSet,
    mu: &[f64],
    family: &Family,
    draws: &[Draw],
    f: usize,
    point: Option<&[f64]>,
) -> FamilyBands {
    let solved: Vec<&Vec<f64>> = draws.iter().filter_map(|d| d[f].as_ref()).collect();
    let n = set.width();
    let column = |a: usize| solved.iter().map(|w| w[a]).collect::<Vec<f64>>();
    let held = |a: usize| {
        let count = solved.iter().filter(|w| w[a] > HELD_ABOVE).count();
        if solved.is_empty() {
            f64::NAN
        } else {
            count as f64 / solved.len() as f64
        }
    };
    let on_original = |w: &Vec<f64>| {
        let losses: Vec<f64> = set.portfolio_returns(w).iter().map(|r| -r).collect();
        let cvar = risk::var_cvar(&losses, &set.probabilities, cfg.confidence).cvar;
        (models::dot(mu, w), cvar)
    };
    let evaluated: Vec<(f64, f64)> = solved.iter().map(|w| on_original(w)).collect();
    let mean_turnover = point
        .filter(|_| !solved.is_empty())
        .map(|x| solved.iter().map(|w| models::turnover(w, x)).sum::<f64>() / solved.len() as f64);
    FamilyBands {
        model: family.name(),
        solved: solved.len(),
        weights: (0..n).map(|a| band(column(a))).collect(),
        expected_return: band(evaluated.iter().map(|e| e.0).collect()),
        cvar: band(evaluated.iter().map(|e| e.1).collect()),
        held_share: (0..n).map(held).collect(),
        mean_turnover,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Politis & Romano (1994): the block lengths of the stationary bootstrap are geometric with mean 1/p,
    /// P(length = k) = (1 − p)^(k−1)·p. Counted here as runs of consecutive rows (a new block that happens
    /// to start at the next row would merge two runs; with 10,000 rows that chance is 1e-4 per block).
    #[test]
    fn block_lengths_are_geometric_with_the_mean_asked_for() {
        let mut rng = Rng::from_seed(7);
        let mean_block = 5.0;
        let idx = stationary_indices(&mut rng, 10_000, 200_000, mean_block);
        let mut lengths = vec![];
        let mut run = 1;
        for w in idx.windows(2) {
            if w[1] == (w[0] + 1) % 10_000 {
                run += 1;
            } else {
                lengths.push(run as f64);
                run = 1;
            }
        }
        let m = lengths.iter().sum::<f64>() / lengths.len() as f64;
        // Standard error of the mean of ~40,000 geometric lengths: sqrt((1 − p)/p²)/sqrt(n) ≈ 0.022.
        assert!((m - mean_block).abs() < 0.1, "mean block length {m}");
        // P(length = 1) = p = 0.2 and P(length = 2) = 0.16 for the geometric law.
        let share =
            |k: f64| lengths.iter().filter(|l| **l == k).count() as f64 / lengths.len() as f64;
        assert!((share(1.0) - 0.2).abs() < 0.01, "{}", share(1.0));
        assert!((share(2.0) - 0.16).abs() < 0.01, "{}", share(2.0));
    }

    /// On i.i.d. normal data the bootstrap's 90% percentile interval of the mean covers the true mean in
    /// about 90% of repeated samples (Efron & Tibshirani, "An Introduction to the Bootstrap", 1993, ch. 13,
    /// the percentile interval; the stationary bootstrap is valid for i.i.d. data as a special case). With
    /// 200 repetitions the binomial 99% range around 0.9 is about 0.845–0.955: between 83% and 96% is
    /// asked for.
    #[test]
    fn percentile_interval_of_the_mean_covers_at_the_nominal_rate() {
        let mut data_rng = Rng::from_seed(11);
        let (reps, n, resamples) = (200, 120, 400);
        let mut covered = 0;
        for rep in 0..reps {
            let sample: Vec<f64> = (0..n).map(|_| data_rng.normal()).collect();
            let mut rng = Rng::from_seed(1_000 + rep);
            let means: Vec<f64> = (0..resamples)
                .map(|_| {
                    let idx = stationary_indices(&mut rng, n, n, 2.0);
                    idx.iter().map(|&i| sample[i]).sum::<f64>() / n as f64
                })
                .collect();
            let [lo, _, hi] = {
                let mut m = means.clone();
                m.sort_by(f64::total_cmp);
                [percentile(&m, 0.05), 0.0, percentile(&m, 0.95)]
            };
            covered += usize::from(lo <= 0.0 && 0.0 <= hi);
        }
        let rate = covered as f64 / reps as f64;
        assert!((0.83..=0.96).contains(&rate), "coverage {rate}");
    }

    /// Hyndman & Fan (1996) definition 7, as numpy's default `percentile`: for [1, 2, 3, 4] the 5th
    /// percentile is 1 + 0.15·1 = 1.15, the median 2.5 and the 95th 3.85.
    #[test]
    fn percentiles_interpolate_between_order_statistics() {
        let v = [1.0, 2.0, 3.0, 4.0];
        assert!((percentile(&v, 0.05) - 1.15).abs() < 1e-12);
        assert!((percentile(&v, 0.5) - 2.5).abs() < 1e-12);
        assert!((percentile(&v, 0.95) - 3.85).abs() < 1e-12);
        assert_eq!(percentile(&[3.0], 0.95), 3.0);
    }

    #[test]
    fn the_seed_is_the_pack_ids_first_sixteen_hex_digits() {
        assert_eq!(seed_of("6e3312788eec4b37abcd"), 0x6e33_1278_8eec_4b37);
        assert_eq!(seed_of("short"), 0);
    }
}
