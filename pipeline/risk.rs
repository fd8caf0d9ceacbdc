//! Stage 3, risk: tail statistics of any weight vector on a scenario set.
//!
//! Definitions (Rockafellar & Uryasev 2002, "Conditional value-at-risk for general loss distributions",
//! J. Banking & Finance 26; Acerbi & Tasche 2002): for losses L_k with probabilities p_k and level c,
//! VaR_c = min { ℓ : P(L ≤ ℓ) ≥ c } (the lower c-quantile) and
//! CVaR_c = VaR_c + 1/(1−c) · Σ_k p_k (L_k − VaR_c)+,
//! which equals min over ℓ of F_c(ℓ) = ℓ + 1/(1−c) · Σ_k p_k (L_k − ℓ)+ (Rockafellar & Uryasev 2000,
//! "Optimization of conditional value-at-risk", J. Risk 2(3), Theorem 1) — the form the LPs use.

use crate::scenarios::ScenarioSet;
use serde::Serialize;

/// Cumulative probabilities within this distance of c count as reaching c (sums of p_k carry rounding).
const QUANTILE_TOL: f64 = 1e-12;

/// VaR and CVaR of one loss distribution at one level.
#[derive(Debug, Clone, Copy, Serialize, schemars::JsonSchema)]
pub struct Tail {
    /// The confidence level c, a fraction (0.95 = 95%).
    pub level: f64,
    /// VaR_c: the lower c-quantile of the loss, a fraction of value per horizon (negative: a gain).
    pub var: f64,
    /// CVaR_c: the mean loss in the tail beyond VaR_c, a fraction of value per horizon.
    pub cvar: f64,
}

/// Lower c-quantile of the losses (VaR_c) and CVaR_c, by sorting.
pub fn var_cvar(losses: &[f64], probs: &[f64], c: f64) -> Tail {
    let order = sorted_order(losses);
    let var = lower_quantile(losses, probs, &order, c);
    let excess: f64 = losses
        .iter()
        .zip(probs)
        .map(|(l, p)| p * (l - var).max(0.0))
        .sum();
    Tail {
        level: c,
        var,
        cvar: var + excess / (1.0 - c),
    }
}

fn sorted_order(losses: &[f64]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..losses.len()).collect();
    order.sort_by(|&a, &b| losses[a].total_cmp(&losses[b]));
    order
}

fn lower_quantile(losses: &[f64], probs: &[f64], order: &[usize], c: f64) -> f64 {
    let mut cum = 0.0;
    for &k in order {
        cum += probs[k];
        if cum >= c - QUANTILE_TOL {
            return losses[k];
        }
    }
    losses[*order.last().expect("non-empty")]
}

/// The Rockafellar–Uryasev function F_c(ℓ) = ℓ + 1/(1−c) · Σ p_k (L_k − ℓ)+.
pub fn ru_objective(losses: &[f64], probs: &[f64], c: f64, ell: f64) -> f64 {
    ell + losses
        .iter()
        .zip(probs)
        .map(|(l, p)| p * (l - ell).max(0.0))
        .sum::<f64>()
        / (1.0 - c)
}

/// Tail weights q_k with CVaR_c = Σ q_k L_k: p_k/(1−c) beyond VaR, the remainder of the tail mass on the
/// scenarios at VaR (shared by probability). These are the weights of the CVaR's subgradient, so
/// component CVaR_i = Σ_k q_k · (−r_ki x_i) and the components add up to CVaR exactly (Euler allocation,
/// Tasche 1999, "Risk contributions and performance measurement").
pub fn tail_weights(losses: &[f64], probs: &[f64], c: f64) -> Vec<f64> {
    let var = var_cvar(losses, probs, c).var;
    let beyond: f64 = losses
        .iter()
        .zip(probs)
        .filter(|(l, _)| **l > var)
        .map(|(_, p)| p)
        .sum();
    let at: f64 = losses
        .iter()
        .zip(probs)
        .filter(|(l, _)| **l == var)
        .map(|(_, p)| p)
        .sum();
    let remainder = ((1.0 - c) - beyond).max(0.0);
    losses
        .iter()
        .zip(probs)
        .map(|(l, p)| {
            if *l > var {
                p / (1.0 - c)
            } else if *l == var && at > 0.0 {
                remainder * (p / at) / (1.0 - c)
            } else {
                0.0
            }
        })
        .collect()
}

/// Everything the pack reports about one portfolio.
#[derive(Debug, Clone, Serialize)]
pub struct RiskProfile {
    pub expected_return: f64,
    /// Probability-weighted standard deviation of the scenario returns.
    pub volatility: f64,
    pub tails: Vec<Tail>,
    /// CVaR contribution per asset at the model confidence, summing to that CVaR.
    pub component_cvar: Vec<f64>,
    pub worst_loss: f64,
    pub worst_scenario: String,
    /// 1 / Σ w²: the inverse of the Herfindahl–Hirschman concentration index of the weights, read as the
    /// number of equal holdings with the same concentration (the "numbers-equivalent" of Adelman 1969,
    /// Review of Economics and Statistics 51(1); cited from memory).
    pub effective_holdings: f64,
}

impl RiskProfile {
    /// The tail entry at level `c` (levels are stored exactly as configured).
    pub fn at(&self, c: f64) -> Tail {
        *self
            .tails
            .iter()
            .find(|t| (t.level - c).abs() < 1e-12)
            .expect("level was computed")
    }
}

/// Computes the full profile of weights `x`; `levels` must contain `confidence`.
pub fn profile(set: &ScenarioSet, x: &[f64], levels: &[f64], confidence: f64) -> RiskProfile {
    let returns = set.portfolio_returns(x);
    let losses: Vec<f64> = returns.iter().map(|r| -r).collect();
    let p = &set.probabilities;
    let mean: f64 = returns.iter().zip(p).map(|(r, p)| r * p).sum();
    let var: f64 = returns
        .iter()
        .zip(p)
        .map(|(r, p)| p * (r - mean).powi(2))
        .sum();
    let q = tail_weights(&losses, p, confidence);
    let component_cvar = (0..set.width())
        .map(|i| (0..set.len()).map(|k| -q[k] * set.row(k)[i] * x[i]).sum())
        .collect();
    let worst = (0..losses.len())
        .max_by(|&a, &b| losses[a].total_cmp(&losses[b]))
        .expect("scenarios");
    RiskProfile {
        expected_return: mean,
        volatility: var.max(0.0).sqrt(),
        tails: levels.iter().map(|&c| var_cvar(&losses, p, c)).collect(),
        component_cvar,
        worst_loss: losses[worst],
        worst_scenario: set.label(worst),
        effective_holdings: 1.0 / x.iter().map(|w| w * w).sum::<f64>(),
    }
}

/// CVaR_c of weights `x` alone (no other statistics).
pub fn cvar_of(set: &ScenarioSet, x: &[f64], c: f64) -> f64 {
    let losses: Vec<f64> = set.portfolio_returns(x).iter().map(|r| -r).collect();
    var_cvar(&losses, &set.probabilities, c).cvar
}

/// CVaR_c of the active loss −a_k = b_k − r_k·x of weights `x` against benchmark returns `b` (one per
/// scenario of `set`) alone: the active CVaR of [`active`] without its other statistics.
pub fn active_cvar_of(set: &ScenarioSet, x: &[f64], b: &[f64], c: f64) -> f64 {
    let losses: Vec<f64> = set
        .portfolio_returns(x)
        .iter()
        .zip(b)
        .map(|(r, b)| b - r)
        .collect();
    var_cvar(&losses, &set.probabilities, c).cvar
}

/// Sums per-asset values by a key (e.g. component CVaR by class), keys in first-seen order.
pub fn by_group(values: &[f64], keys: &[String]) -> Vec<(String, f64)> {
    let mut out: Vec<(String, f64)> = Vec::new();
    for (v, k) in values.iter().zip(keys) {
        match out.iter_mut().find(|(g, _)| g == k) {
            Some((_, s)) => *s += v,
            None => out.push((k.clone(), *v)),
        }
    }
    out
}

/// Active (relative) risk of a portfolio against a benchmark whose return in scenario k is b_k.
///
/// Active return a_k = r_k·x − b_k. Tracking error is the standard deviation of active return (Grinold &
/// Kahn, "Active Portfolio Management", 2nd ed. 2000, ch. 3: active risk ψ = Std{r_P − r_B}), here over the
/// scenarios with their probabilities: TE = √(Σ_k p_k (a_k − ā)²), ā = Σ_k p_k a_k. Active VaR and CVaR
/// are those of the active loss −a_k (the definitions at the top of this module, Rockafellar & Uryasev
/// 2000/2002). The Euler contributions to active CVaR split Σ_k q_k (−a_k) (tail weights q of the active
/// loss, [`tail_weights`]) into the portfolio's side per asset, Σ_k q_k (−r_ki x_i), and the benchmark's
/// side, Σ_k q_k b_k; they add up to the active CVaR at the model confidence (Tasche 1999, as for total
/// CVaR: CVaR of the active loss is positively homogeneous in the portfolio and benchmark weights).
#[derive(Debug, Clone, Serialize)]
pub struct ActiveRisk {
    /// ā over the horizon.
    pub active_return: f64,
    /// TE over the horizon.
    pub tracking_error: f64,
    /// TE × √(horizons per year): the square-root-of-time rule (common practice; exact only for
    /// independent horizons).
    pub tracking_error_annualised: f64,
    /// VaR and CVaR of the active loss at every reported level.
    pub tails: Vec<Tail>,
    /// The portfolio's side of the Euler split of active CVaR at the model confidence, per asset.
    pub component: Vec<f64>,
    /// The benchmark's side of that split, Σ_k q_k b_k.
    pub benchmark_component: f64,
}

impl ActiveRisk {
    /// The active tail entry at level `c`.
    pub fn at(&self, c: f64) -> Tail {
        *self
            .tails
            .iter()
            .find(|t| (t.level - c).abs() < 1e-12)
            .expect("level was computed")
    }
}

/// Active risk of weights `x` against benchmark returns `b` (one per scenario of `set`); `levels` must
/// contain `confidence`.
pub fn active(
    set: &ScenarioSet,
    x: &[f64],
    b: &[f64],
    levels: &[f64],
    confidence: f64,
    horizons_per_year: f64,
) -> ActiveRisk {
    let p = &set.probabilities;
    let a: Vec<f64> = set
        .portfolio_returns(x)
        .iter()
        .zip(b)
        .map(|(r, b)| r - b)
        .collect();
    let mean: f64 = a.iter().zip(p).map(|(a, p)| a * p).sum();
    let var: f64 = a.iter().zip(p).map(|(a, p)| p * (a - mean).powi(2)).sum();
    let te = var.max(0.0).sqrt();
    let losses: Vec<f64> = a.iter().map(|a| -a).collect();
    let q = tail_weights(&losses, p, confidence);
    let component = (0..set.width())
        .map(|i| (0..set.len()).map(|k| -q[k] * set.row(k)[i] * x[i]).sum())
        .collect();
    ActiveRisk {
        active_return: mean,
        tracking_error: te,
        tracking_error_annualised: te * horizons_per_year.sqrt(),
        tails: levels.iter().map(|&c| var_cvar(&losses, p, c)).collect(),
        component,
        benchmark_component: q.iter().zip(b).map(|(q, b)| q * b).sum(),
    }
}

/// Risk of the surplus (assets less liabilities) of a fund holding `x`, as a fraction of the assets.
///
/// With assets A, liabilities L, funded ratio F = A/L and the liabilities' return ℓ_k in scenario k, the
/// surplus changes by A·r_k·x − L·ℓ_k, i.e. s_k = r_k·x − ℓ_k/F of the assets (the surplus return on
/// assets of the asset–liability literature: Sharpe & Tint 1990, "Liabilities — a new approach", Journal
/// of Portfolio Management 16(2); Waring 2011, "Pension Finance", ch. 5). Surplus VaR and CVaR are those
/// of the surplus loss −s_k = ℓ_k/F − r_k·x (the definitions at the top of this module).
#[derive(Debug, Clone, Serialize)]
pub struct SurplusRisk {
    /// Σ p_k s_k over the horizon.
    pub expected_return: f64,
    /// The probability-weighted standard deviation of s_k.
    pub volatility: f64,
    /// VaR and CVaR of the surplus loss at every reported level.
    pub tails: Vec<Tail>,
}

impl SurplusRisk {
    /// The surplus tail entry at level `c`.
    pub fn at(&self, c: f64) -> Tail {
        *self
            .tails
            .iter()
            .find(|t| (t.level - c).abs() < 1e-12)
            .expect("level was computed")
    }
}

/// The surplus returns s_k = r_k·x − offsets_k, with offsets_k = ℓ_k/F.
pub fn surplus_returns(set: &ScenarioSet, x: &[f64], offsets: &[f64]) -> Vec<f64> {
    set.portfolio_returns(x)
        .iter()
        .zip(offsets)
        .map(|(r, c)| r - c)
        .collect()
}

/// Surplus risk of weights `x` given the liabilities' share of each scenario's loss, offsets_k = ℓ_k/F.
pub fn surplus(set: &ScenarioSet, x: &[f64], offsets: &[f64], levels: &[f64]) -> SurplusRisk {
    let p = &set.probabilities;
    let s = surplus_returns(set, x, offsets);
    let mean: f64 = s.iter().zip(p).map(|(s, p)| s * p).sum();
    let var: f64 = s.iter().zip(p).map(|(s, p)| p * (s - mean).powi(2)).sum();
    let losses: Vec<f64> = s.iter().map(|s| -s).collect();
    SurplusRisk {
        expected_return: mean,
        volatility: var.max(0.0).sqrt(),
        tails: levels.iter().map(|&c| var_cvar(&losses, p, c)).collect(),
    }
}
