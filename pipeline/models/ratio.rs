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
//! Künzi-Bay & Mayer (2006), added as in [`Problem::cutting_plane`]; changing λ changes only the objective,
//! so HiGHS re-solves from the last basis (primal simplex after an objective change, dual after a cut).
//! λ moves in every round, not only once the cuts of the current λ are complete: each iterate is a
//! portfolio of X, and its return over the Rockafellar–Uryasev function at the LP's ℓ (an upper bound on
//! its CVaR) is a valid lower bound on λ*. That halved the rounds at 100 × 2,500 and 500 × 20,000 against
//! moving λ only after the cuts of each λ were complete (README, "Performance"). The loop ends in a round
//! that needs no cut and whose portfolio's exact ratio does not exceed λ, which is then F(λ) ≈ 0.
//! Reads what `models` reads; nothing downstream.

use super::lp::{Failure, Lin, Lp, Solved, Timing};
use super::{CUT_TOLERANCE, MAX_CUT_ROUNDS, Problem, Session};
use crate::risk;
use std::time::Instant;

/// Dinkelbach stops when the next λ exceeds the current one by at most this (relative): the ratio found
/// is then within about this much, times max C/min C over X's iterates, of the optimum.
pub const RATIO_TOLERANCE: f64 = 1e-12;

impl Problem<'_> {
    /// The maximum of the (net) return over CVaR on X by Dinkelbach iterations on one cut model. Returns
    /// the Charnes–Cooper LP's variables at the optimum: z = t·x with t = 1/CVaR(x), and the ratio.
    pub(super) fn dinkelbach(&self) -> Result<Solved, Failure> {
        let start = Instant::now();
        let mut lp = Lp::new(self.feasible, false);
        let (block, active, blocks) = self.cut_blocks(&mut lp, true);
        if let (Some(a), Some(f)) = (self.active, active) {
            lp.limit(f, a.budget);
        }
        let ret = lp.net_return(&self.mu, &self.feasible.cost_rates);
        let mut lambda = 0.0;
        let mut objective = parametric(&ret, &block, lambda);
        let mut session = Session::new(&lp, &objective, true, self.backend)?;
        let all: Vec<usize> = (0..self.set.len()).collect();
        for b in &blocks {
            let (lo, terms) = self.cut_row(&lp, b, &all);
            session.cut(&mut lp, lo, &terms);
        }
        let mut last_cuts = vec![all; blocks.len()];
        for _ in 0..MAX_CUT_ROUNDS {
            let solved = session.solve(&lp, &objective, true)?;
            let mut cut = false;
            let mut bound = None;
            let mut outside = false;
            for (b, last_cut) in blocks.iter().zip(&mut last_cuts) {
                if b.benchmark.is_none() && lambda == 0.0 {
                    continue; // the objective does not see the total CVaR yet
                }
                let (ell, w) = (solved.extra[b.cc.at], solved.extra[b.cc.at + 1]);
                let (tail, excess) = self.tail_beyond(&solved.weights, b.benchmark, 1.0, ell);
                if b.benchmark.is_none() {
                    bound = Some(ell + excess / (1.0 - self.confidence));
                }
                if excess <= w + CUT_TOLERANCE * (1.0 + w.abs()) || *last_cut == tail {
                    continue;
                }
                let (lo, terms) = self.cut_row(&lp, b, &tail);
                session.cut(&mut lp, lo, &terms);
                *last_cut = tail;
                cut = true;
                outside |= b.benchmark.is_some();
            }
            if cut {
                // A round that cuts only the total CVaR still yields a portfolio of the model's set; its
                // ratio, with the CVaR bounded above by the Rockafellar–Uryasev function at the LP's ℓ, is a
                // lower bound on λ* worth moving to now. One the active budget cuts off is not in the set.
                if !outside
                    && let Some(r) = bound.and_then(|c| self.ratio_below(&solved.weights, c))
                    && r > lambda * (1.0 + RATIO_TOLERANCE)
                {
                    lambda = r;
                    objective = parametric(&ret, &block, lambda);
                    session.objective(&objective);
                }
                continue;
            }
            let (ratio, cvar) = self.ratio_of(&solved.weights)?;
            if ratio <= lambda + RATIO_TOLERANCE * lambda.abs() {
                let own = session.timing();
                return Ok(self.charnes_cooper(solved, ratio, cvar, own, start));
            }
            lambda = ratio;
            objective = parametric(&ret, &block, lambda);
            session.objective(&objective);
        }
        Err(Failure::Solver(format!(
            "Dinkelbach's iterations for the ratio did not settle within {MAX_CUT_ROUNDS} LP solves"
        )))
    }

    /// The (net) return of `x` over `cvar_above`, an upper bound on its CVaR: a ratio at most x's own,
    /// hence at most λ*; `None` when either is not positive.
    fn ratio_below(&self, x: &[f64], cvar_above: f64) -> Option<f64> {
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

    /// The last iterate as the Charnes–Cooper LP's solution (z = x/CVaR, t = 1/CVaR, objective the ratio),
    /// with the loop's timing: everything outside the solver counts as building.
    fn charnes_cooper(
        &self,
        mut solved: Solved,
        ratio: f64,
        cvar: f64,
        own: Timing,
        start: Instant,
    ) -> Solved {
        let t = 1.0 / cvar;
        solved.weights.iter_mut().for_each(|w| *w *= t);
        solved.scale = Some(t);
        solved.objective = ratio;
        let mut timing = own;
        timing.build += start.elapsed().saturating_sub(own.build + own.solve);
        solved.timing = timing;
        solved
    }
}

/// ρ − λ·C as one linear function of the columns.
fn parametric(ret: &Lin, cvar: &Lin, lambda: f64) -> Lin {
    let mut f = ret.clone();
    for &(c, a) in &cvar.0 {
        f.add(c, -lambda * a);
    }
    f
}
