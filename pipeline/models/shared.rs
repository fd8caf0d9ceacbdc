//! The cutting-plane LPs of one problem on one loaded cut model: the two auxiliary LPs, the three
//! families, the minimum active CVaR and the efficient frontier's capped LPs all differ only in their
//! objective and in the bounds of a few columns, so they are solved one after another on the same HiGHS
//! model, each starting from the last one's basis and cuts.
//!
//! A cut of the CVaR term (Künzi-Bay & Mayer 2006) bounds the tail term from below for every portfolio,
//! so it stays valid whatever the objective, cap, floor or λ: the cuts one LP needed carry over to the
//! next, which usually needs only a few more. Three columns carry what changes between the LPs: v, tied
//! by an equality row to the CVaR function ℓ + Σ_g w_g/(1−c) (its upper bound is the cap), r, tied to
//! the (net) expected return (its lower bound is the floor), and with an active-CVaR budget v_a, tied to
//! the active CVaR function (its upper bound is the budget, lifted for the minimum active CVaR). Changing a
//! cap or a floor changes a bound rather than the rows. The ratio runs Dinkelbach's parametric LPs
//! max r − λ·v on the same model (`ratio.rs`). Below the cut switch ([`Method::Direct`]) every LP is the
//! direct one, built and solved on its own. Reads what `models` reads.

use super::lp::{self, Failure, Lin, Lp, Solved, Timing};
use super::{CutBlock, Kind, MAX_CUT_ROUNDS, Method, Problem, Session};
use std::time::Instant;

const INF: f64 = f64::INFINITY;

/// Within one LP's loop, the cuts slack at the last optimum are deleted every this many rounds (and
/// before every LP of the model): a long loop would otherwise re-solve an ever larger model.
pub(super) const DROP_EVERY: usize = 16;

/// The LPs of one problem, on one shared cut model with cutting planes.
pub struct Lps<'p> {
    p: &'p Problem<'p>,
    method: Method,
    /// The cut model, made at the first LP that needs it; `Err` when it could not be loaded.
    shared: Option<Result<Shared<'p>, Failure>>,
}

/// One loaded cut model with the cuts so far.
pub(super) struct Shared<'p> {
    pub(super) lp: Lp,
    pub(super) session: Session,
    pub(super) blocks: Vec<CutBlock<'p>>,
    pub(super) cuts: Vec<Vec<Vec<usize>>>,
    /// v = the total loss's CVaR function; its upper bound is the cap.
    pub(super) cvar: lp::Col,
    /// r = the (net) expected return; its lower bound is the floor.
    pub(super) ret: lp::Col,
    /// v_a = the active loss's CVaR function, with an active-CVaR budget; its upper bound is the budget.
    active: Option<lp::Col>,
    /// The session's timing when the last LP ended (each LP reports its own share).
    before: Timing,
    /// The best return/CVaR ratio of a portfolio of the model's set an LP found (its CVaR bounded above
    /// by the Rockafellar–Uryasev function at the LP's ℓ), a lower bound on the optimal ratio where
    /// Dinkelbach's iterations start; 0 before any.
    pub(super) ratio_found: f64,
}

impl<'p> Problem<'p> {
    /// The problem's LPs with `method`: with cutting planes on one shared cut model, else each on its own.
    pub fn lps(&'p self, method: Method) -> Lps<'p> {
        Lps {
            p: self,
            method,
            shared: None,
        }
    }
}

impl<'p> Shared<'p> {
    pub(super) fn new(p: &'p Problem<'p>) -> Result<Shared<'p>, Failure> {
        let mut lp = Lp::new(p.feasible, false);
        let (block, active_block, blocks) = p.cut_blocks(&mut lp, true);
        let tie = |lp: &mut Lp, f: &Lin| {
            let c = lp.column(-INF, INF);
            lp.row(
                0.0,
                0.0,
                std::iter::once((c, 1.0)).chain(f.0.iter().map(|&(c, a)| (c, -a))),
            );
            c
        };
        let cvar = tie(&mut lp, &block);
        let ret_fn = lp.net_return(&p.mu, &p.feasible.cost_rates);
        let ret = tie(&mut lp, &ret_fn);
        let active = active_block.map(|f| tie(&mut lp, &f));
        if let (Some(a), Some(c)) = (p.active, active) {
            lp.bound(c, -INF, a.budget);
        }
        let objective = Lin(vec![(ret, 1.0)]);
        let mut session = Session::new(&lp, &objective, true, p.backend)?;
        let cuts = p.first_cuts(&mut session, &mut lp, &blocks);
        // The first cuts (each group's over all its scenarios, of total mass 1 ≥ 1 − c) keep every LP
        // bounded in ℓ, so they stay whatever their slack.
        session.keep_cuts();
        Ok(Shared {
            lp,
            session,
            blocks,
            cuts,
            cvar,
            ret,
            active,
            before: Timing::default(),
            ratio_found: 0.0,
        })
    }

    /// Sets the bounds of v (`cap`, infinite: none), r (`floor`, minus infinite: none) and v_a (the
    /// budget, or none when `budget` is false) and the objective to maximise.
    pub(super) fn shape(
        &mut self,
        p: &Problem,
        objective: &Lin,
        cap: f64,
        floor: f64,
        budget: bool,
    ) {
        self.drop_slack_cuts();
        self.session.objective(objective);
        self.session.bound(&mut self.lp, self.cvar, -INF, cap);
        self.session.bound(&mut self.lp, self.ret, floor, INF);
        if let (Some(c), Some(a)) = (self.active, p.active) {
            let hi = if budget { a.budget } else { INF };
            self.session.bound(&mut self.lp, c, -INF, hi);
        }
    }

    /// One LP of `kind` (not the ratio, see `ratio.rs`), maximised until no cut is violated; the total
    /// loss's CVaR is cut only when the objective or a cap depends on it. `None` when the loop does not
    /// settle within [`MAX_CUT_ROUNDS`] rounds.
    fn solve(&mut self, p: &Problem, kind: Kind) -> Option<Result<Solved, Failure>> {
        let start = Instant::now();
        let (objective, negate, cut_total) = match kind {
            Kind::MaxReturn(cap) => {
                let objective = Lin(vec![(self.ret, 1.0)]);
                self.shape(p, &objective, cap.unwrap_or(INF), -INF, true);
                (objective, false, cap.is_some())
            }
            Kind::MinCvar(floor) => {
                let objective = Lin(vec![(self.cvar, -1.0)]);
                self.shape(p, &objective, INF, floor.unwrap_or(-INF), true);
                (objective, true, true)
            }
            Kind::MinActive => {
                let c = self.active.expect("a budget's block");
                let objective = Lin(vec![(c, -1.0)]);
                self.shape(p, &objective, INF, -INF, false);
                (objective, true, false)
            }
            Kind::Ratio => unreachable!("the ratio runs Dinkelbach's loop"),
        };
        for round in 1..=MAX_CUT_ROUNDS {
            if round % DROP_EVERY == 0 {
                self.drop_slack_cuts();
            }
            let mut solved = match self.session.solve(&self.lp, &objective, true) {
                Ok(s) => s,
                Err(f) => return Some(Err(f)),
            };
            let round = p.cut_round(self, &solved, !cut_total);
            if !round.cut {
                // A portfolio of the set (the minimum active CVaR lifts the budget: not of the set).
                if !matches!(kind, Kind::MinActive)
                    && let Some(r) = round
                        .cvar_bound
                        .and_then(|c| p.ratio_below(&solved.weights, c))
                {
                    self.ratio_found = self.ratio_found.max(r);
                }
                if negate {
                    solved.objective = -solved.objective;
                }
                solved.timing = self.timing_since(start);
                return Some(Ok(solved));
            }
        }
        None
    }

    /// Deletes the cuts slack at the last optimum: every solve's work grows with the rows, and cuts a
    /// later LP needs again are found again. The record of each group's last cut is cleared with them,
    /// so a deleted cut is never taken for one still in the model.
    pub(super) fn drop_slack_cuts(&mut self) {
        if self.session.drop_slack_cuts() > 0 {
            self.cuts.iter_mut().flatten().for_each(|last| last.clear());
        }
    }

    /// The solver's share of the LP that started at `start`, with everything outside the solver (loss
    /// evaluation, cut sums) counted as building.
    pub(super) fn timing_since(&mut self, start: Instant) -> Timing {
        let now = self.session.timing();
        let mut timing = Timing {
            build: now.build.saturating_sub(self.before.build),
            solve: now.solve.saturating_sub(self.before.solve),
            runs: now.runs - self.before.runs,
        };
        timing.build += start.elapsed().saturating_sub(timing.build + timing.solve);
        self.before = now;
        timing
    }
}

impl<'p> Lps<'p> {
    /// The problem these are the LPs of.
    pub fn problem(&self) -> &'p Problem<'p> {
        self.p
    }

    /// Whether the LPs share one cut model (cutting planes).
    pub fn shared(&self) -> bool {
        self.method == Method::Cuts
    }

    /// Maximise the (net) expected return, with CVaR at most `cap` when one is given.
    pub fn max_return(&mut self, cap: Option<f64>) -> Result<Solved, Failure> {
        self.solve(Kind::MaxReturn(cap))
    }

    /// Minimise CVaR, with the (net) expected return at least `floor` when one is given.
    pub fn min_cvar(&mut self, floor: Option<f64>) -> Result<Solved, Failure> {
        self.solve(Kind::MinCvar(floor))
    }

    /// Minimise the active CVaR, the budget left out (a solver failure without a budget).
    pub fn min_active_cvar(&mut self) -> Result<Solved, Failure> {
        if self.p.active.is_none() {
            return Err(Failure::Solver("no benchmark to be active against".into()));
        }
        self.solve(Kind::MinActive)
    }

    /// The ratio's optimum as [`Problem::max_ratio`] gives it (weights x, scale t = 1/CVaR).
    pub fn max_ratio(&mut self) -> Result<Solved, Failure> {
        self.solve(Kind::Ratio)
    }

    fn solve(&mut self, kind: Kind) -> Result<Solved, Failure> {
        let solved = self.solve_raw(kind);
        match kind {
            Kind::Ratio => super::charnes_cooper_portfolio(solved),
            _ => solved,
        }
    }

    /// The LP of `kind`; for the ratio the Charnes–Cooper LP's variables (z, t).
    fn solve_raw(&mut self, kind: Kind) -> Result<Solved, Failure> {
        let p = self.p;
        let uncut = matches!(kind, Kind::MaxReturn(None)) && p.active.is_none();
        if self.method == Method::Direct || uncut {
            // Without a CVaR term the LP is X alone: the direct LP has no scenario rows.
            return p.direct(kind);
        }
        let shared = self.shared.get_or_insert_with(|| Shared::new(p));
        let sh = match shared {
            Ok(sh) => sh,
            Err(f) => return Err(f.clone()),
        };
        match kind {
            Kind::Ratio => sh.max_ratio(p),
            _ => sh.solve(p, kind).unwrap_or_else(|| p.direct_if_small(kind)),
        }
    }
}
