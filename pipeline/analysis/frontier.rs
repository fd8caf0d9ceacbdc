//! The efficient frontier: K portfolios from the minimum-CVaR portfolio to the maximum-return portfolio,
//! each the max-return LP at a CVaR cap swept evenly between the two (Rockafellar & Uryasev 2000, §3:
//! the CVaR-constrained return maximisation traces the mean–CVaR efficient frontier).

use crate::models::lp::{Failure, Solved};
use crate::models::{Lps, Problem, Status};
use crate::risk;
use rayon::prelude::*;
use serde::Serialize;

/// One frontier point.
#[derive(Debug, Clone, Serialize)]
pub struct FrontierPoint {
    pub cvar_cap: f64,
    pub status: String,
    pub expected_return: Option<f64>,
    pub cvar: Option<f64>,
    pub var: Option<f64>,
    pub weights: Option<Vec<f64>>,
}

/// The frontier, with the endpoints it was swept between.
#[derive(Debug, Clone, Serialize)]
pub struct Frontier {
    pub min_cvar: f64,
    pub max_return_cvar: f64,
    pub points: Vec<FrontierPoint>,
}

/// Sweeps the CVaR cap over `k` evenly spaced values; `None` when either end (the minimum-CVaR or the
/// maximum-return LP) has no optimum. With cutting planes the LPs run on the problem's one cut model
/// (`lps`, as the models left it, [`Problem::lps`]) in order of the cap, the cuts of each carried to the
/// next; with the direct LP the
/// points are solved in parallel, each an independent LP. Either way the result does not depend on
/// scheduling.
pub fn sweep(lps: &mut Lps, k: usize) -> Option<Frontier> {
    let p = lps.problem();
    let low = lps.min_cvar(None).ok()?;
    let high = lps.max_return(None).ok()?;
    let (lo, hi) = (
        low.objective,
        risk::cvar_of(p.set, &high.weights, p.confidence),
    );
    let hi = hi.max(lo);
    // A hair of slack keeps the end caps feasible despite solver tolerance at the minimum.
    let slack = 1e-9 * (1.0 + lo.abs());
    let caps: Vec<f64> = (0..k)
        .map(|j| lo + (hi - lo) * j as f64 / (k - 1) as f64 + if j == 0 { slack } else { 0.0 })
        .collect();
    let points = if lps.shared() {
        caps.iter()
            .map(|&cap| point(p, lps.max_return(Some(cap)), cap, lo))
            .collect()
    } else {
        caps.par_iter()
            .map(|&cap| point(p, p.max_return(Some(cap)), cap, lo))
            .collect()
    };
    Some(Frontier {
        min_cvar: lo,
        max_return_cvar: hi,
        points,
    })
}

/// One point; every cap is at least the minimum CVaR `lo`, so a solver's "infeasible" there is a numerical
/// failure (`solver_error`), not an infeasible cap.
fn point(p: &Problem, solved: Result<Solved, Failure>, cap: f64, lo: f64) -> FrontierPoint {
    let o = crate::models::outcome(p, solved, Some(cap), None, || {
        format!("CVaR cap {cap:.6} infeasible")
    });
    let o = crate::models::unless_contradicted(
        o,
        (cap >= lo).then(|| format!("the minimum-CVaR portfolio has CVaR {lo:.6} ≤ the cap")),
    );
    let tails = o.weights.as_ref().map(|w| {
        let losses: Vec<f64> = p.set.portfolio_returns(w).iter().map(|r| -r).collect();
        risk::var_cvar(&losses, &p.set.probabilities, p.confidence)
    });
    FrontierPoint {
        cvar_cap: cap,
        status: o.status.word().to_string(),
        expected_return: (o.status == Status::Optimal).then(|| o.objective).flatten(),
        cvar: tails.map(|t| t.cvar),
        var: tails.map(|t| t.var),
        weights: o.weights,
    }
}
