//! The ratio model's cutting-plane solve by Dinkelbach's method: the return/CVaR ratio maximised as a
//! sequence of parametric LPs max ρ(x) − λ·CVaR_c(x) over X on one loaded HiGHS model, whose CVaR cuts
//! stay valid for every λ and so carry over from one λ to the next.
//!
//! Dinkelbach (1967), "On nonlinear fractional programming", Management Science 13(7): for a concave
//! numerator ρ and a convex, positive denominator C, λ* = max ρ/C over X is the root of
//! F(λ) = max_x ρ(x) − λ·C(x), and λ_{k+1} = ρ(x_k)/C(x_k) with x_k the maximiser of F(λ_k) is Newton's
//! method on F (superlinear convergence; Schaible 1976, "Fractional programming II, on Dinkelbach's
//! algorithm", Management Science 22(8)). Every λ_k is the ratio of a portfolio of X, so λ_k ≤ λ*; when
//! F(λ_k) = C(x_k)·(λ_{k+1} − λ_k) is zero to the tolerance, x_k is a maximiser of the ratio, the optimum of
//! the Charnes–Cooper LP.
//!
//! Unlike the Charnes–Cooper LP, which with cuts is unbounded until enough cuts exist and needs t bounded
//! by 1/min CVaR (an auxiliary minimum-CVaR solve first), every parametric LP is bounded: X is, and for
//! λ > 0 the cut model of λ·CVaR is bounded below in ℓ. X keeps its bounds as column bounds (the
//! Charnes–Cooper LP turns them into rows z_i ≤ u_i·t), so each re-solve is smaller. The cuts are those of
//! Künzi-Bay & Mayer (2006) on the problem's shared cut model (`shared.rs`), so the ratio starts from the
//! cuts the LPs before it needed; changing λ changes only the objective r − λ·v, so HiGHS re-solves from
//! the last basis (primal simplex after an objective change, dual after a cut).
//! λ moves in every round, not only once the cuts of the current λ are complete: each iterate is a
//! portfolio of X, and its return over the Rockafellar–Uryasev function at the LP's ℓ (an upper bound on
//! its CVaR) is a valid lower bound on λ*. That halved the rounds at 100 × 2,500 and 500 × 20,000 against
//! moving λ only after the cuts of each λ were complete (README, "Performance"). The loop ends in a round
//! that needs no cut and whose portfolio's exact ratio does not exceed λ, which is then F(λ) ≈ 0. λ starts
//! not at 0 but at the best such lower bound the LPs solved before on the same model found (in a run the
//! minimum-CVaR, capped maximum-return and floored minimum-CVaR portfolios), which skips the first
//! iterations' detour through the maximum-return end.
//! Reads what `models` reads; nothing downstream.

use super::lp::{Col, Failure, Lin, Solved, Timing};
use super::shared::{DROP_EVERY, Shared};
use super::{MAX_CUT_ROUNDS, Problem};
use crate::risk;
use std::time::Instant;

/// Dinkelbach stops when the next λ exceeds the current one by at most this (relative): the ratio found
/// is then within about this much, times max C/min C over X's iterates, of the optimum.
pub const RATIO_TOLERANCE: f64 = 1e-12;

impl Shared<'_> {
    /// The maximum of the (net) return over CVaR on X by Dinkelbach iterations on the shared cut model.
    /// Returns the Charnes–Cooper LP's variables at the optimum: z = t·x with t = 1/CVaR(x), and the
    /// ratio.
    pub(super) fn max_ratio(&mut self, p: &Problem) -> Result<Solved, Failure> {
        let start = Instant::now();
        // The best ratio of a portfolio an earlier LP of the model found is a valid start (λ_0 ≤ λ*).
        let mut lambda = self.ratio_found;
        let mut objective = parametric(self.ret, self.cvar, lambda);
        self.shape(p, &objective, f64::INFINITY, f64::NEG_INFINITY, true);
        for round in 1..=MAX_CUT_ROUNDS {
            if round % DROP_EVERY == 0 {
                self.drop_slack_cuts();
            }
            let solved = self.session.solve(&self.lp, &objective, true)?;
            // While λ = 0 the objective does not see the total CVaR: only the active budget is cut.
            let round = p.cut_round(self, &solved, lambda == 0.0);
            if round.cut {
                // A round that cuts only the total CVaR still yields a portfolio of the model's set; its
                // ratio, with the CVaR bounded above by the Rockafellar–Uryasev function at the LP's ℓ, is a
                // lower bound on λ* worth moving to now. One the active budget cuts off is not in the set.
                if !round.outside
                    && let Some(r) = round
                        .cvar_bound
                        .and_then(|c| p.ratio_below(&solved.weights, c))
                    && r > lambda * (1.0 + RATIO_TOLERANCE)
                {
                    lambda = r;
                    objective = parametric(self.ret, self.cvar, lambda);
                    self.session.objective(&objective);
                }
                continue;
            }
            let (ratio, cvar) = p.ratio_of(&solved.weights)?;
            if ratio <= lambda + RATIO_TOLERANCE * lambda.abs() {
                let timing = self.timing_since(start);
                return Ok(charnes_cooper(solved, ratio, cvar, timing));
            }
            lambda = ratio;
            objective = parametric(self.ret, self.cvar, lambda);
            self.session.objective(&objective);
        }
        Err(Failure::Solver(format!(
            "Dinkelbach's iterations for the ratio did not settle within {MAX_CUT_ROUNDS} LP solves"
        )))
    }
}

impl Problem<'_> {
    /// The (net) return of `x` over `cvar_above`, an upper bound on its CVaR: a ratio at most x's own,
    /// hence at most λ*; `None` when either is not positive.
    pub(super) fn ratio_below(&self, x: &[f64], cvar_above: f64) -> Option<f64> {
        let ret = super::net_return(self, x);
        (cvar_above > 0.0 && ret > 0.0).then(|| ret / cvar_above)
    }

    /// The (net) return over CVaR of weights `x` and the CVaR; a CVaR ≤ 0 or a return ≤ 0 at the
    /// maximum-return portfolio (the first iterate) means the ratio LP does not apply.
    fn ratio_of(&self, x: &[f64]) -> Result<(f64, f64), Failure> {
        let cvar = risk::cvar_of(self.set, x, self.confidence);
        let ret = super::net_return(self, x);
        let positive = |v: f64| v > 0.0; // false for NaN too
        if !positive(cvar) || !positive(ret) {
            return Err(Failure::Solver(format!(
                "return {ret:.3e} and CVaR {cvar:.3e} of an iterate: the ratio LP does not apply (both must be > 0)"
            )));
        }
        Ok((ret / cvar, cvar))
    }
}

/// The last iterate as the Charnes–Cooper LP's solution (z = x/CVaR, t = 1/CVaR, objective the ratio),
/// with the loop's timing.
fn charnes_cooper(mut solved: Solved, ratio: f64, cvar: f64, timing: Timing) -> Solved {
    let t = 1.0 / cvar;
    solved.weights.iter_mut().for_each(|w| *w *= t);
    solved.scale = Some(t);
    solved.objective = ratio;
    solved.timing = timing;
    solved
}

/// r − λ·v: the return column less λ times the CVaR column.
fn parametric(ret: Col, cvar: Col, lambda: f64) -> Lin {
    Lin(vec![(ret, 1.0), (cvar, -lambda)])
}
