//! Funded status and surplus risk: for the current portfolio and every model, the surplus (assets less
//! liabilities) over the scenarios — its VaR, CVaR and volatility as fractions of the assets
//! ([`risk::surplus`]), the funded ratio at the end of the horizon in the worst scenarios — and, with
//! durations, the share of the liabilities' rate sensitivity the portfolio hedges and the funded ratio if
//! the discount rate moves by ±1 percentage point.
//!
//! The liabilities' return in scenario k is the proxy series' (`liabilities.proxy`, a column of the
//! reference scenario set). Reads the config, the market data, the reference set and the portfolios;
//! writes nothing.

use super::stress::Shock;
use crate::config::{Basis, Config, Liabilities};
use crate::diag::Check;
use crate::ingest::MarketData;
use crate::risk::{self, SurplusRisk};
use crate::scenarios::ScenarioSet;

/// The move of the discount rate the funded ratio is shown at, either way: one percentage point.
pub const RATE_MOVE: f64 = 0.01;

/// The tail the end-of-horizon funded ratio is averaged over: the worst 5% of scenarios.
pub const FUNDED_TAIL: f64 = 0.05;

/// One portfolio against the liabilities.
#[derive(Debug, Clone)]
pub struct SurplusPosition {
    pub portfolio: String,
    pub surplus: SurplusRisk,
    /// The mean funded ratio at the end of the horizon over the worst [`FUNDED_TAIL`] of scenarios.
    pub funded_ratio_tail: f64,
    /// Σ A·w_i·D_i / (L·D_L): the share of the liabilities' rate sensitivity the assets hedge; `None`
    /// without a liability duration or without asset durations.
    pub hedge_ratio: Option<f64>,
    /// The funded ratio with the discount rate 1 pp lower / higher, by duration (and the liabilities'
    /// convexity when given); `None` as `hedge_ratio`.
    pub funded_ratio_rate_down: Option<f64>,
    pub funded_ratio_rate_up: Option<f64>,
    /// Per shock of the stress set, in its order: the change in surplus and the funded ratio after it.
    pub stress: Vec<Stressed>,
}

/// A portfolio's surplus under one shock.
#[derive(Debug, Clone, Copy)]
pub struct Stressed {
    /// Σ w_i s_i − ℓ/F: the change in surplus as a fraction of the assets (ℓ the proxy's return in the
    /// shock, 0 when the shock does not move it).
    pub surplus_change: f64,
    /// F·(1 + Σ w_i s_i)/(1 + ℓ).
    pub funded_ratio: f64,
}

/// A portfolio's surplus under every shock: its asset P&L Σ w_i s_i against the liabilities' move.
fn stressed(x: &[f64], shocks: &[Shock], f: f64) -> Vec<Stressed> {
    shocks
        .iter()
        .map(|s| {
            let pnl: f64 = s.returns.iter().zip(x).map(|(r, w)| r * w).sum();
            let l = s.liabilities.unwrap_or(0.0);
            Stressed {
                surplus_change: pnl - l / f,
                funded_ratio: f * (1.0 + pnl) / (1.0 + l),
            }
        })
        .collect()
}

/// The liability proxy's return over each historical window of the stress set (its prices over the full
/// history, as the window's assets are measured); defined shocks keep what their moves say.
pub fn move_in_windows(cfg: &Config, data: &MarketData, shocks: &mut [Shock]) {
    let Some(l) = &cfg.liabilities else {
        return;
    };
    let Some(j) = data.reference.iter().position(|a| *a == l.proxy) else {
        return;
    };
    let p = &data.reference_full_prices[j];
    let row = |d| data.full_dates.iter().position(|x| *x == d);
    for s in shocks.iter_mut().filter(|s| s.kind == "historical") {
        if let (Some(a), Some(b)) = (s.start.and_then(row), s.end.and_then(row)) {
            s.liabilities = Some(p[b] / p[a] - 1.0).filter(|r| r.is_finite());
        }
    }
}

/// Everything the pack reports about the liabilities.
#[derive(Debug, Clone)]
pub struct LiabilityReport {
    pub liabilities: Liabilities,
    /// F = fund.value / liabilities.value.
    pub funded_ratio: f64,
    pub basis: Basis,
    /// The proxy's return per scenario, ℓ_k.
    pub proxy_returns: Vec<f64>,
    /// Whether the asset metadata gives any asset a duration.
    pub asset_durations: bool,
    pub positions: Vec<SurplusPosition>,
}

/// The funded ratio F = A / L, when liabilities and the fund's value are configured.
pub fn funded_ratio(cfg: &Config) -> Option<f64> {
    let l = cfg.liabilities.as_ref()?;
    Some(cfg.fund.money.as_ref()?.value / l.value)
}

/// The proxy's return per scenario of `reference` (ingest made the proxy a reference series).
pub fn proxy_returns(cfg: &Config, reference: &ScenarioSet) -> Option<Vec<f64>> {
    let l = cfg.liabilities.as_ref()?;
    let j = reference.assets.iter().position(|a| *a == l.proxy)?;
    Some((0..reference.len()).map(|k| reference.row(k)[j]).collect())
}

/// The liabilities' part of the surplus loss per scenario, c_k = ℓ_k / F: what the surplus basis adds to
/// every scenario's asset loss.
pub fn offsets(cfg: &Config, reference: &ScenarioSet) -> Option<Vec<f64>> {
    let f = funded_ratio(cfg)?;
    Some(
        proxy_returns(cfg, reference)?
            .iter()
            .map(|l| l / f)
            .collect(),
    )
}

/// The liabilities report, or `None` without liabilities.
pub fn report(
    cfg: &Config,
    data: &MarketData,
    (set, reference): (&ScenarioSet, &ScenarioSet),
    portfolios: &[(String, Vec<f64>)],
    shocks: &[Shock],
) -> Option<LiabilityReport> {
    let liabilities = cfg.liabilities.clone()?;
    let f = funded_ratio(cfg)?;
    let proxy = proxy_returns(cfg, reference)?;
    let offsets: Vec<f64> = proxy.iter().map(|l| l / f).collect();
    let durations: Vec<Option<f64>> = data.meta.iter().map(|m| m.duration).collect();
    let asset_durations = durations.iter().any(Option::is_some);
    let positions = portfolios
        .iter()
        .map(|(name, x)| {
            let rate = Rates::of(&liabilities, f, x, &durations, asset_durations);
            SurplusPosition {
                portfolio: name.clone(),
                surplus: risk::surplus(set, x, &offsets, &cfg.levels),
                funded_ratio_tail: funded_tail(set, x, &proxy, f),
                hedge_ratio: rate.as_ref().map(|r| r.hedge),
                funded_ratio_rate_down: rate.as_ref().map(|r| r.down),
                funded_ratio_rate_up: rate.as_ref().map(|r| r.up),
                stress: stressed(x, shocks, f),
            }
        })
        .collect();
    Some(LiabilityReport {
        liabilities,
        funded_ratio: f,
        basis: cfg.basis,
        proxy_returns: proxy,
        asset_durations,
        positions,
    })
}

/// The funded ratio at the end of the horizon in scenario k, F·(1 + r_k·x)/(1 + ℓ_k), averaged over the
/// worst [`FUNDED_TAIL`] of scenarios (the CVaR of the funded ratio's fall, at level 1 − FUNDED_TAIL).
fn funded_tail(set: &ScenarioSet, x: &[f64], proxy: &[f64], f: f64) -> f64 {
    let ends: Vec<f64> = set
        .portfolio_returns(x)
        .iter()
        .zip(proxy)
        .map(|(r, l)| -(f * (1.0 + r) / (1.0 + l)))
        .collect();
    -risk::var_cvar(&ends, &set.probabilities, 1.0 - FUNDED_TAIL).cvar
}

/// The rate sensitivity of one portfolio against the liabilities.
struct Rates {
    hedge: f64,
    down: f64,
    up: f64,
}

impl Rates {
    /// Needs the liabilities' duration (positive) and at least one asset duration; assets without one
    /// count as insensitive to rates.
    fn of(l: &Liabilities, f: f64, x: &[f64], d: &[Option<f64>], any: bool) -> Option<Rates> {
        let dl = l.duration.filter(|&d| d > 0.0)?;
        if !any {
            return None;
        }
        let da: f64 = x.iter().zip(d).map(|(w, d)| w * d.unwrap_or(0.0)).sum();
        let at = |dy: f64| {
            let assets = value_change(da, None, dy);
            let liabilities = value_change(dl, l.convexity, dy);
            f * (1.0 + assets) / (1.0 + liabilities)
        };
        Some(Rates {
            hedge: f * da / dl,
            down: at(-RATE_MOVE),
            up: at(RATE_MOVE),
        })
    }
}

/// The relative change in value for a yield move dy by modified duration D and convexity C:
/// ΔP/P ≈ −D·dy + ½·C·dy² (Fabozzi, "Bond Markets, Analysis and Strategies", ch. 4: the duration and
/// convexity approximation of the price–yield relationship).
pub fn value_change(duration: f64, convexity: Option<f64>, dy: f64) -> f64 {
    -duration * dy + 0.5 * convexity.unwrap_or(0.0) * dy * dy
}

/// What the checks table says about the liabilities: the funded ratio, the basis, and that the hedge ratio
/// needs durations when they are missing.
pub fn checks(report: Option<&LiabilityReport>, cfg: &Config) -> Vec<Check> {
    let Some(r) = report else {
        return vec![];
    };
    let mut out = vec![Check::pass(
        "liabilities.funded_ratio",
        format!(
            "liabilities {:.0} against assets {:.0}: funded ratio {:.1}%; the liabilities move with the proxy series `{}`; the models' CVaR is on the {} basis (risk.basis)",
            r.liabilities.value,
            r.liabilities.value * r.funded_ratio,
            r.funded_ratio * 100.0,
            r.liabilities.proxy,
            cfg.basis.name()
        ),
    )];
    if r.liabilities.duration.is_none() || !r.asset_durations {
        out.push(Check::warn(
            "liabilities.durations",
            "no hedge ratio and no funded ratio at the discount rate ±1 pp: they need liabilities.duration and a `duration` column in the asset metadata",
        ));
    }
    out
}

/// On the surplus basis (`risk.basis: surplus`), the scenario set the models work on — every return less
/// the liabilities' part c_k = ℓ_k/F of scenario k ([`ScenarioSet::less_per_scenario`]) — and the c_k;
/// `None` on the assets basis. `reference` holds the proxy's returns on the rows of `set`. Every LP on
/// the result (each family, the auxiliary LPs, the frontier, a backtest month, a resample) then keeps,
/// minimises or bounds the surplus CVaR and the expected surplus return, and the verification and risk
/// profiles measure the same loss: the one place the basis enters.
pub fn basis_set(
    cfg: &Config,
    set: &ScenarioSet,
    reference: &ScenarioSet,
) -> Option<(ScenarioSet, Vec<f64>)> {
    let c = basis_offsets(cfg, reference)?;
    Some((set.less_per_scenario(&c), c))
}

/// The offsets ℓ_k / F of [`offsets`] on the surplus basis; `None` on the assets' basis.
pub fn basis_offsets(cfg: &Config, reference: &ScenarioSet) -> Option<Vec<f64>> {
    match cfg.basis {
        Basis::Surplus => offsets(cfg, reference),
        Basis::Assets => None,
    }
}

/// A benchmark's returns moved onto the surplus basis: b_k − c_k, so that the active loss
/// (b_k − c_k) − (r_k·x − c_k) stays b_k − r_k·x.
pub fn benchmark_on_basis(b: Vec<f64>, c: Option<&[f64]>) -> Vec<f64> {
    match c {
        Some(c) => b.iter().zip(c).map(|(b, c)| b - c).collect(),
        None => b,
    }
}

/// The sentence a `not_applicable` ratio model gets on the surplus basis: what its failed precondition
/// means for a fund with liabilities.
pub const RATIO_ON_SURPLUS: &str = "on the surplus basis the ratio is expected surplus return per unit of surplus CVaR: it needs every portfolio to carry surplus risk and some portfolio whose expected return beats the liabilities' expected growth (the proxy's mean return divided by the funded ratio); a plan whose assets cannot beat its liabilities' growth over the horizon has no such portfolio, which is common, and the other two models still apply";
