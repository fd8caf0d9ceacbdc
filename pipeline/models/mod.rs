//! Stage 4, models: the three CVaR model families as linear programs on one feasible set X.
//!
//! - `max_return`: maximise μ·x subject to x ∈ X and CVaR_c(x) ≤ cap.
//! - `min_cvar`: minimise CVaR_c(x) subject to x ∈ X and μ·x ≥ floor.
//! - `max_ratio`: maximise μ·x / CVaR_c(x) over X as one LP by the Charnes & Cooper (1962) change of
//!   variables t = 1/CVaR, z = t·x applied to the Rockafellar & Uryasev (2000) linearisation: maximise μ·z
//!   subject to ℓ + 1/(1−c) Σ p_k u_k ≤ 1, u_k ≥ −r_k·z − ℓ, u ≥ 0, and X's rows multiplied through by t.
//!   Valid only when CVaR > 0 on all of X and some x ∈ X has μ·x > 0 (then the optimal ratio is positive
//!   and the denominator row binds); both are checked by auxiliary LPs every run. With cutting planes the
//!   same optimum is reached by Dinkelbach's parametric LPs max μ·x − λ·CVaR(x) on one cut model
//!   (`ratio.rs`).
//!
//! With transaction cost rates and current holdings h, "return" is net of the cost of getting there:
//! μ·x − Σ_i rate_i·|x_i − h_i| ([`net_return`]), linear through the turnover columns d_i ≥ |x_i − h_i|
//! ([`lp::Lp::net_return`]); max_return maximises it, min_cvar's floor bounds it and max_ratio maximises
//! it per unit of CVaR (a concave numerator over a convex, positive denominator, for which the
//! Charnes–Cooper transformation stays exact: Schaible 1974, "Parameter-free convex equivalent and dual
//! programs of fractional programming problems", Zeitschrift für Operations Research 18). Zero rates, or
//! no holdings, leave every LP as it is without costs.
//!
//! With an active-CVaR budget B against a benchmark returning b_k in scenario k (the policy benchmark,
//! `policy.active_cvar_budget`), every LP also keeps CVaR_c of the active loss b_k − r_k·x at or below B,
//! by the same linearisation: ℓ_a + 1/(1−c) Σ p_k v_k ≤ B, v_k ≥ 0, v_k ≥ b_k − r_k·x − ℓ_a (in the
//! Charnes–Cooper LP b_k·t and B·t, like X's constants), or by its own cutting planes. The budget is part
//! of the set every family and auxiliary LP works on; whether it leaves that set empty is established by
//! the LP of the minimum active CVaR over X ([`Problem::min_active_cvar_by`]).
//!
//! Every reported optimum is re-checked against its constraints in code ([`verify`]).
//!
//! The families are defined once ([`Family`], `family.rs`) and solved together by one function,
//! [`solve_all`] (`solve.rs`), which the run, the walk-forward backtest and the bench all call; X itself is
//! built from the config here too ([`feasible_set`], `feasible.rs`). Reads config, ingest, scenarios and
//! risk; nothing downstream.

mod family;
mod feasible;
pub mod lp;
mod ratio;
mod shared;
mod solve;

pub use family::Family;
pub use feasible::{feasible_set, policy_lines};
pub use shared::Lps;
pub use solve::{
    Auxiliary, FamilyOutcome, Premises, Solution, Targets, solve_all, solve_all_by, solve_all_on,
};

use crate::config::{Backend, CapRule, FloorRule};
use crate::diag::{Check, Level};
use crate::risk;
use crate::scenarios::ScenarioSet;
use lp::{Failure, Lin, Lp, Solved, Timing};
use rayon::prelude::*;
use serde::Serialize;
use std::time::Instant;

/// The Charnes–Cooper LP's solution (z, t) as the portfolio x = z/t, with t kept as the scale.
fn charnes_cooper_portfolio(solved: Result<Solved, Failure>) -> Result<Solved, Failure> {
    let mut solved = solved?;
    let t = solved.scale.unwrap_or(0.0);
    if t <= MIN_SCALE {
        return Err(Failure::Solver(format!(
            "Charnes–Cooper scale t = {t:e} is not bounded away from 0"
        )));
    }
    solved.weights.iter_mut().for_each(|z| *z /= t);
    Ok(solved)
}

/// Tolerance of the post-solve feasibility check on reported portfolios.
pub const FEASIBILITY_TOLERANCE: f64 = 1e-7;
/// A post-solve violation above this is no solution at all, and the model is a `solver_error`: it would
/// show in the pack's figures, which print weights and losses to 0.01% = 1e-4.
pub const NOT_A_SOLUTION: f64 = 1e-4;
/// Below this, a Charnes–Cooper scale t is treated as zero (the ratio would be ill-defined).
pub const MIN_SCALE: f64 = 1e-9;

/// A group limit with resolved member indices.
#[derive(Debug, Clone, Serialize)]
pub struct Group {
    pub name: String,
    pub members: Vec<usize>,
    pub min: f64,
    pub max: f64,
}

/// The feasible set X shared by all models.
#[derive(Debug, Clone)]
pub struct FeasibleSet {
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    pub groups: Vec<Group>,
    pub turnover_max: Option<f64>,
    pub current: Option<Vec<f64>>,
    /// One-way transaction cost per unit of weight traded, per asset (a fraction; empty or zero: free).
    /// Not a constraint: the models' returns are net of Σ rate_i·|x_i − current_i| ([`cost`]).
    pub cost_rates: Vec<f64>,
}

impl FeasibleSet {
    /// Whether moving away from the current holdings costs anything: holdings given and a rate positive.
    pub fn charges_costs(&self) -> bool {
        self.current.is_some() && self.cost_rates.iter().any(|&r| r > 0.0)
    }
}

/// One problem instance: scenarios, their mean, the model confidence, X and an optional active-CVaR
/// budget.
pub struct Problem<'a> {
    pub set: &'a ScenarioSet,
    pub mu: Vec<f64>,
    pub confidence: f64,
    pub feasible: &'a FeasibleSet,
    pub backend: Backend,
    /// A limit on active CVaR at the model confidence, kept by every LP; `None`: no such limit.
    pub active: Option<ActiveBudget<'a>>,
}

/// A limit on active risk: CVaR_c of the active loss b_k − r_k·x at most `budget` (a fraction of value),
/// b_k being the benchmark's return in scenario k of the problem's set.
#[derive(Debug, Clone, Copy)]
pub struct ActiveBudget<'a> {
    /// The benchmark's return per scenario, in the order of the problem's set.
    pub benchmark: &'a [f64],
    pub budget: f64,
}

/// How a model run ended.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    Optimal,
    Infeasible,
    NotApplicable,
    SolverError,
}

impl Status {
    /// The word written to results.json.
    pub fn word(&self) -> &'static str {
        match self {
            Status::Optimal => "optimal",
            Status::Infeasible => "infeasible",
            Status::NotApplicable => "not_applicable",
            Status::SolverError => "solver_error",
        }
    }
}

/// The outcome of one model.
#[derive(Debug, Clone)]
pub struct Outcome {
    pub status: Status,
    /// Why it is not optimal, or remarks on an optimal solution.
    pub message: Option<String>,
    pub weights: Option<Vec<f64>>,
    /// The LP objective: μ·x, CVaR, or the ratio.
    pub objective: Option<f64>,
    /// Charnes–Cooper scale t at the optimum (max_ratio only).
    pub scale: Option<f64>,
    /// Largest constraint violation found by the post-solve check.
    pub max_violation: Option<f64>,
}

impl Outcome {
    /// An outcome without a portfolio.
    pub fn failed(status: Status, message: String) -> Outcome {
        Outcome {
            status,
            message: Some(message),
            weights: None,
            objective: None,
            scale: None,
            max_violation: None,
        }
    }
}

/// How the CVaR enters an LP.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// One row and one column per scenario (Rockafellar & Uryasev 2000).
    Direct,
    /// Cutting planes on the CVaR term, generated until none is violated (Künzi-Bay & Mayer 2006).
    Cuts,
}

/// From this many scenarios on, the models use the cutting-plane method with HiGHS. Measured with `tailpack
/// bench` in a release build on this project's 2-core machine (medians of 5; README, "Performance"): with
/// every LP of a problem on one warm-started cut model (`shared.rs`), cuts take 0.27–0.73 of the direct LP's
/// time for every model from 100 scenarios on (40 × 100: 1.09 / 2.31 / 1.64 ms against 2.58 / 3.18 / 3.85
/// ms for max-return / min-CVaR / max-ratio; 50 × 143: 0.33 / 0.57 / 0.45 of it; 40 × 200: 0.36 / 0.42 /
/// 0.53). Before the shared model the switch sat at 300 scenarios (200 with at least as many assets as
/// scenarios).
pub const CUTS_FROM_SCENARIOS: usize = 100;
/// The switch for the interior-point backend, which has no warm start here (each cut round is a fresh
/// solve): it keeps the direct LP, an independent formulation for the cross-check, up to large sets.
pub const CUTS_FROM_SCENARIOS_REBUILT: usize = 20_000;

/// The method used for `scenarios` scenarios with `backend` (whatever the number of assets).
pub fn method_for(scenarios: usize, backend: Backend) -> Method {
    let cuts = match backend {
        Backend::Highs => scenarios >= CUTS_FROM_SCENARIOS,
        Backend::Clarabel => scenarios >= CUTS_FROM_SCENARIOS_REBUILT,
    };
    if cuts { Method::Cuts } else { Method::Direct }
}

/// How the CVaR term is solved, in words for the pack's run facts.
pub fn method_description(method: Method) -> &'static str {
    match method {
        Method::Direct => "direct Rockafellar–Uryasev LP (one row per scenario)",
        Method::Cuts => {
            "cutting planes on the CVaR term (Künzi-Bay & Mayer 2006), same optimum as the direct LP"
        }
    }
}
/// The cutting-plane loop stops when the true tail term exceeds the LP's w by at most this (relative).
pub const CUT_TOLERANCE: f64 = 1e-10;
/// Rounds after which the cutting-plane loop gives up and the direct LP is solved instead, up to
/// [`DIRECT_UP_TO_CELLS`].
pub const MAX_CUT_ROUNDS: usize = 400;
/// The largest scenario set (assets × scenarios) whose direct LP a loop that did not settle falls back
/// to: the direct LP has one row per scenario holding every asset, 2·10^8 nonzeros at 2,000 × 100,000,
/// more than HiGHS can presolve in this machine's memory (README, "Performance").
pub const DIRECT_UP_TO_CELLS: usize = 50_000_000;

#[derive(Clone, Copy)]
enum Kind {
    MaxReturn(Option<f64>),
    MinCvar(Option<f64>),
    /// The Charnes–Cooper LP directly; with cuts, Dinkelbach's parametric LPs (`ratio.rs`).
    Ratio,
    /// Minimise the active CVaR over X (without its budget).
    MinActive,
}

impl Problem<'_> {
    /// The method used for this problem's size.
    pub fn method(&self) -> Method {
        method_for(self.set.len(), self.backend)
    }

    /// Maximise μ·x over X, with CVaR_c(x) ≤ cap when a cap is given.
    pub fn max_return(&self, cap: Option<f64>) -> Result<Solved, Failure> {
        self.max_return_by(cap, self.method())
    }

    /// Minimise CVaR_c(x) over X, with μ·x ≥ floor when a floor is given.
    pub fn min_cvar(&self, floor: Option<f64>) -> Result<Solved, Failure> {
        self.min_cvar_by(floor, self.method())
    }

    /// The Charnes–Cooper LP: maximise μ·z with the scaled CVaR ≤ 1 and X scaled by t; returns z/t.
    pub fn max_ratio(&self) -> Result<Solved, Failure> {
        self.max_ratio_by(self.method())
    }

    /// [`Problem::max_return`] with an explicit method.
    pub fn max_return_by(&self, cap: Option<f64>, method: Method) -> Result<Solved, Failure> {
        self.lps(method).max_return(cap)
    }

    /// [`Problem::min_cvar`] with an explicit method.
    pub fn min_cvar_by(&self, floor: Option<f64>, method: Method) -> Result<Solved, Failure> {
        self.lps(method).min_cvar(floor)
    }

    /// Minimise the active CVaR over X, the budget left out: whether the budget leaves any portfolio.
    /// Without an active budget there is no benchmark, and this is a solver failure saying so.
    pub fn min_active_cvar_by(&self, method: Method) -> Result<Solved, Failure> {
        self.lps(method).min_active_cvar()
    }

    /// [`Problem::max_ratio`] with an explicit method.
    pub fn max_ratio_by(&self, method: Method) -> Result<Solved, Failure> {
        self.lps(method).max_ratio()
    }

    /// The direct LP of `kind` when the set is small enough for it ([`DIRECT_UP_TO_CELLS`]), else a
    /// solver failure saying the cutting-plane loop did not settle: the fallback of a loop that did not.
    fn direct_if_small(&self, kind: Kind) -> Result<Solved, Failure> {
        if self.set.returns.len() <= DIRECT_UP_TO_CELLS {
            return self.direct(kind);
        }
        Err(Failure::Solver(format!(
            "the cutting-plane loop did not settle within {MAX_CUT_ROUNDS} rounds, and at {} assets × {} scenarios the direct LP is too large to solve instead",
            self.set.width(),
            self.set.len()
        )))
    }

    /// The direct LP of `kind`: the Rockafellar–Uryasev rows, one per scenario (for the ratio, the
    /// Charnes–Cooper LP, whose solution is z and t).
    fn direct(&self, kind: Kind) -> Result<Solved, Failure> {
        let start = Instant::now();
        let mut lp = Lp::new(self.feasible, matches!(kind, Kind::Ratio));
        let block = match kind {
            Kind::MaxReturn(None) | Kind::MinActive => Lin::default(),
            _ => lp.cvar(self.set, self.confidence),
        };
        let active = self
            .active
            .map(|a| lp.active_cvar(self.set, a.benchmark, self.confidence));
        let (objective, maximise) = self.shape(&mut lp, kind, block, active);
        let built = start.elapsed();
        let mut solved = lp.solve(&objective, maximise, self.backend)?;
        solved.timing.build += built;
        Ok(solved)
    }

    /// Adds the model's own row (cap, floor or the Charnes–Cooper normalisation) and the active-CVaR
    /// budget's row, and returns its objective and sense, given the CVaR function `block` and the active
    /// CVaR function `active` (present with a budget). The minimum active CVaR leaves its budget out.
    fn shape(&self, lp: &mut Lp, kind: Kind, block: Lin, active: Option<Lin>) -> (Lin, bool) {
        if let Kind::MinActive = kind {
            return (active.unwrap_or_default(), false);
        }
        if let (Some(a), Some(f)) = (self.active, active) {
            lp.limit(f, a.budget);
        }
        match kind {
            Kind::MaxReturn(cap) => {
                if let Some(cap) = cap {
                    lp.at_most(block, cap);
                }
                (lp.net_return(&self.mu, &self.feasible.cost_rates), true)
            }
            Kind::MinCvar(floor) => {
                if let Some(floor) = floor {
                    let ret = lp.net_return(&self.mu, &self.feasible.cost_rates);
                    lp.at_least(ret, floor);
                }
                (block, false)
            }
            Kind::Ratio => {
                lp.at_most(block, 1.0);
                (lp.net_return(&self.mu, &self.feasible.cost_rates), true)
            }
            Kind::MinActive => unreachable!("returned above"),
        }
    }

    /// The cutting-plane CVaR blocks of `lp`: the total loss's when `total`, and the active loss's with a
    /// budget; returns their CVaR functions (the total's empty without it) and the blocks, in that order.
    fn cut_blocks<'s>(&'s self, lp: &mut Lp, total: bool) -> (Lin, Option<Lin>, Vec<CutBlock<'s>>) {
        let groups = cut_groups(self.set.len());
        let mut blocks = Vec::new();
        let block = if total {
            let (f, cc) = lp.cvar_cuts(self.confidence, groups);
            blocks.push(CutBlock {
                cc,
                benchmark: None,
            });
            f
        } else {
            Lin::default()
        };
        let active = self.active.map(|a| {
            let (f, cc) = lp.cvar_cuts(self.confidence, groups);
            blocks.push(CutBlock {
                cc,
                benchmark: Some(a.benchmark),
            });
            f
        });
        (block, active, blocks)
    }

    /// Every block's first cuts, one per group over all of the group's scenarios; returns the last cut of
    /// every block and group (what [`Problem::cut_round`] compares new cuts with).
    fn first_cuts(
        &self,
        session: &mut Session,
        lp: &mut Lp,
        blocks: &[CutBlock],
    ) -> Vec<Vec<Vec<usize>>> {
        let s = self.set.len();
        let mut rows = Vec::new();
        let cuts = blocks
            .iter()
            .map(|b| {
                (0..b.cc.groups)
                    .map(|g| {
                        let all: Vec<usize> = b.cc.group(g, s).collect();
                        rows.push(self.cut_row(lp, b, g, &all));
                        all
                    })
                    .collect()
            })
            .collect();
        session.cuts(lp, &rows);
        cuts
    }

    /// One round of cuts after a solve on the cut model `sh`: for every block (those on the total loss
    /// only when not `skip_total`), the portfolio's losses against the LP's ℓ and tail columns. A block
    /// whose true tail term exceeds the LP's Σ_g w_g by more than the tolerance gets a cut for every group
    /// whose own tail term exceeds its w_g by more than its share of the tolerance (at least one does) and
    /// whose tail changed since its last cut (`sh.cuts` holds every block's and group's last cut).
    fn cut_round(&self, sh: &mut shared::Shared, solved: &Solved, skip_total: bool) -> Round {
        let mut round = Round::default();
        let s = self.set.len();
        let mut rows = Vec::new();
        for (b, last) in sh.blocks.iter().zip(sh.cuts.iter_mut()) {
            if skip_total && b.benchmark.is_none() {
                continue;
            }
            let ell = solved.extra[b.cc.at];
            let w = &solved.extra[b.cc.at + 1..b.cc.at + 1 + b.cc.groups];
            let losses = self.losses(&solved.weights, b.benchmark);
            let tails: Vec<(Vec<usize>, f64)> = (0..b.cc.groups)
                .map(|g| self.tail_beyond(&losses, b.cc.group(g, s), ell))
                .collect();
            let excess: f64 = tails.iter().map(|(_, e)| e).sum();
            let w_total: f64 = w.iter().sum();
            if b.benchmark.is_none() {
                round.cvar_bound = Some(ell + excess / (1.0 - self.confidence));
            }
            let tolerance = CUT_TOLERANCE * (1.0 + w_total.abs());
            if excess <= w_total + tolerance {
                continue;
            }
            let share = tolerance / b.cc.groups as f64;
            let wanted: Vec<usize> = (0..b.cc.groups)
                .filter(|&g| tails[g].1 > w[g] + share && last[g] != tails[g].0)
                .collect();
            let built: &Lp = &sh.lp;
            rows.par_extend(
                wanted
                    .par_iter()
                    .map(|&g| self.cut_row(built, b, g, &tails[g].0)),
            );
            for &g in &wanted {
                last[g] = tails[g].0.clone();
                round.cut = true;
                round.outside |= b.benchmark.is_some();
            }
        }
        sh.session.cuts(&mut sh.lp, &rows);
        round
    }

    /// The cut of block `b` and group `g` over the scenarios `cut`: its lower bound and terms.
    fn cut_row(
        &self,
        lp: &Lp,
        b: &CutBlock,
        g: usize,
        cut: &[usize],
    ) -> (f64, Vec<(lp::Col, f64)>) {
        match b.benchmark {
            None => (0.0, lp::cut_terms(self.set, cut, &lp.weights, b.cc, g)),
            Some(bench) => {
                lp::active_cut_terms(self.set, cut, &lp.weights, (b.cc, g), bench, lp.scale)
            }
        }
    }
}

/// What a round of cuts did.
#[derive(Debug, Default)]
struct Round {
    /// Whether any cut was added.
    cut: bool,
    /// Whether a cut of the active budget's block was added (the portfolio was outside the budget).
    outside: bool,
    /// The Rockafellar–Uryasev function at the LP's ℓ for the total loss, an upper bound on the
    /// portfolio's CVaR (`None` when the total loss's block was skipped or absent).
    cvar_bound: Option<f64>,
}

/// From this many scenarios on, a cutting-plane CVaR block splits the scenarios into [`CUT_GROUPS`]
/// groups, each with its own tail column and cuts ([`lp::CutColumns`]). Measured with `tailpack bench
/// --chosen-only` and on invented scenario files of 2,000 assets (README, "Performance"): one group needed
/// 364 rounds for the minimum CVaR at 2,000 × 5,000 and did not settle within [`MAX_CUT_ROUNDS`] at
/// 2,000 × 20,000, where 16 to 64 groups need 13 to 48; at 500 × 20,000 32 groups took 0.4 of one
/// group's time for min_cvar and max_ratio.
pub const CUT_GROUPS_FROM_SCENARIOS: usize = 1_000;
/// The number of scenario groups of a large set (see [`CUT_GROUPS_FROM_SCENARIOS`]).
pub const CUT_GROUPS: usize = 32;

/// How many scenario groups a cutting-plane CVaR block has for `scenarios` scenarios.
pub fn cut_groups(scenarios: usize) -> usize {
    if scenarios >= CUT_GROUPS_FROM_SCENARIOS {
        CUT_GROUPS
    } else {
        1
    }
}

/// One CVaR block of a cutting-plane LP: the total loss −r_k·x, or with a benchmark the active loss
/// b_k − r_k·x.
struct CutBlock<'b> {
    cc: lp::CutColumns,
    benchmark: Option<&'b [f64]>,
}

impl Problem<'_> {
    /// The loss of weights `x` in every scenario: −r_k·x, or with a benchmark the active loss
    /// b_k − r_k·x.
    fn losses(&self, x: &[f64], benchmark: Option<&[f64]>) -> Vec<f64> {
        let returns = self.set.portfolio_returns(x);
        match benchmark {
            None => returns.iter().map(|r| -r).collect(),
            Some(b) => returns.iter().zip(b).map(|(r, b)| b - r).collect(),
        }
    }

    /// The scenarios of `range` whose loss exceeds ℓ, and their tail term Σ_k p_k (L_k − ℓ)+.
    fn tail_beyond(
        &self,
        losses: &[f64],
        range: std::ops::Range<usize>,
        ell: f64,
    ) -> (Vec<usize>, f64) {
        let tail: Vec<usize> = range.filter(|&k| losses[k] > ell).collect();
        let excess: f64 = tail
            .iter()
            .map(|&k| self.set.probabilities[k] * (losses[k] - ell))
            .sum();
        (tail, excess)
    }
}

/// The LP of a cutting-plane loop: with HiGHS one loaded model that receives each cut; with Clarabel,
/// which has no warm start here, the whole LP is solved again with the cuts so far.
enum Session {
    Highs(lp::HighsLp),
    Rebuild { backend: Backend, timing: Timing },
}

impl Session {
    fn new(lp: &Lp, objective: &Lin, maximise: bool, backend: Backend) -> Result<Session, Failure> {
        Ok(match backend {
            Backend::Highs => Session::Highs(lp.to_highs(objective, maximise)?),
            other => Session::Rebuild {
                backend: other,
                timing: Timing::default(),
            },
        })
    }

    /// Adds cuts lo ≤ Σ a_j·col_j, in one call with HiGHS.
    fn cuts(&mut self, lp: &mut Lp, rows: &[(f64, Vec<(lp::Col, f64)>)]) {
        match self {
            Session::Highs(h) => h.rows_at_least(rows),
            Session::Rebuild { .. } => {
                for (lo, terms) in rows {
                    lp.row(*lo, f64::INFINITY, terms.iter().copied());
                }
            }
        }
    }

    fn solve(&mut self, lp: &Lp, objective: &Lin, maximise: bool) -> Result<Solved, Failure> {
        match self {
            Session::Highs(h) => h.solve(),
            Session::Rebuild { backend, timing } => {
                let s = lp.solve(objective, maximise, *backend)?;
                timing.absorb(s.timing);
                Ok(s)
            }
        }
    }

    /// Makes the cuts so far permanent: [`Session::drop_slack_cuts`] keeps them.
    fn keep_cuts(&mut self) {
        if let Session::Highs(h) = self {
            h.keep_rows();
        }
    }

    /// Deletes the cuts that are slack at the last optimum (HiGHS; the rebuilt LP keeps them all);
    /// returns how many.
    fn drop_slack_cuts(&mut self) -> usize {
        match self {
            Session::Highs(h) => h.drop_slack_rows(),
            Session::Rebuild { .. } => 0,
        }
    }

    /// Replaces the bounds of column `c`.
    fn bound(&mut self, lp: &mut Lp, c: lp::Col, lo: f64, hi: f64) {
        lp.bound(c, lo, hi);
        if let Session::Highs(h) = self {
            h.bound(c, lo, hi);
        }
    }

    /// Replaces the objective (the rebuilt LP takes it at each solve).
    fn objective(&mut self, objective: &Lin) {
        if let Session::Highs(h) = self {
            h.objective(objective);
        }
    }

    fn timing(&self) -> Timing {
        match self {
            Session::Highs(h) => h.timing,
            Session::Rebuild { timing, .. } => *timing,
        }
    }
}

/// The max_ratio preconditions, from the two auxiliary LPs.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Preconditions {
    /// min CVaR_c over X (must be > 0), a fraction of value per horizon.
    pub min_cvar: Option<f64>,
    /// max μ·x over X (must be > 0), a fraction of value per horizon.
    pub max_return: Option<f64>,
    /// Whether both are positive, so the max-ratio model applies.
    pub holds: bool,
    /// Whether both auxiliary LPs reached an optimum, so that `holds` is a finding rather than a gap:
    /// when not, the ratio model is a solver error, not "not applicable".
    pub established: bool,
    /// Why the preconditions do not hold or were not established, in words.
    pub reason: Option<String>,
    /// Whether `max_return` (and the ratio's numerator) is net of transaction costs.
    pub net: bool,
}

/// How the messages name the models' return: net of costs when the models charge them.
pub fn return_words(net: bool) -> &'static str {
    if net {
        "expected return net of transaction costs"
    } else {
        "expected return"
    }
}

impl Preconditions {
    /// The preconditions taken as holding without an auxiliary LP ([`Premises::Given`]): nothing was
    /// solved, so nothing is established (the ratio LP itself needs neither auxiliary optimum).
    pub fn given() -> Preconditions {
        Preconditions {
            min_cvar: None,
            max_return: None,
            holds: true,
            established: false,
            reason: None,
            net: false,
        }
    }

    /// The two precondition checks of the ratio family for the checks table: minimum CVaR over X at
    /// `confidence` and maximum expected return over X, each must be > 0.
    pub fn checks(&self, confidence: f64) -> [Check; 2] {
        let fmt = |v: Option<f64>| v.map_or("n/a".to_string(), |x| format!("{x:.6}"));
        let level = |ok: bool| if ok { Level::Pass } else { Level::Warn };
        let ratio = Family::MaxRatio.name();
        [
            Check::new(
                format!("{ratio}.cvar_positive"),
                level(self.min_cvar.is_some_and(|m| m > 0.0)),
                format!(
                    "Charnes–Cooper precondition: minimum CVaR {:.1}% over the feasible set = {} (must be > 0)",
                    confidence * 100.0,
                    fmt(self.min_cvar)
                ),
            ),
            Check::new(
                format!("{ratio}.return_positive"),
                level(self.max_return.is_some_and(|m| m > 0.0)),
                format!(
                    "Charnes–Cooper precondition: maximum {} over the feasible set = {} (must be > 0)",
                    return_words(self.net),
                    fmt(self.max_return)
                ),
            ),
        ]
    }
}

/// What an LP's failure says, in words for a message.
pub fn failure_words(f: &Failure) -> String {
    match f {
        Failure::Infeasible => "the solver reports it infeasible".into(),
        Failure::Unbounded => "the solver reports it unbounded".into(),
        Failure::Solver(m) => format!("solver: {m}"),
    }
}

/// Checks CVaR > 0 on all of X (via the minimum) and that some x ∈ X has μ·x > 0, from the two auxiliary
/// LPs. An auxiliary LP without an optimum establishes nothing: the reason then says which LP ended how,
/// and claims nothing about X.
pub fn preconditions(
    min_cvar: &Result<f64, Failure>,
    max_return: &Result<f64, Failure>,
    net: bool,
) -> Preconditions {
    let ret = return_words(net);
    let max_return_lp = format!("the maximum {ret} over the feasible set");
    let unsolved = [
        ("the minimum CVaR over the feasible set", min_cvar),
        (max_return_lp.as_str(), max_return),
    ]
    .iter()
    .filter_map(|(what, r)| {
        r.as_ref().err().map(|f| {
            format!(
                "the LP for {what} ended without an optimum ({})",
                failure_words(f)
            )
        })
    })
    .collect::<Vec<_>>();
    let reason = match (min_cvar, max_return) {
        _ if !unsolved.is_empty() => Some(format!(
            "{}; so the Charnes–Cooper preconditions could not be established and the ratio LP was not solved",
            unsolved.join("; ")
        )),
        (Ok(m), _) if *m <= 0.0 => Some(format!(
            "the minimum CVaR over the feasible set is {m:.6} ≤ 0 (a portfolio with no tail loss exists, e.g. a riskless asset allowed at full weight), so the return/CVaR ratio is unbounded or undefined and the Charnes–Cooper LP does not apply"
        )),
        (_, Ok(r)) if *r <= 0.0 => Some(format!(
            "the maximum {ret} over the feasible set is {r:.6} ≤ 0, so no portfolio has a positive return/CVaR ratio and the Charnes–Cooper LP does not apply"
        )),
        _ => None,
    };
    Preconditions {
        min_cvar: min_cvar.as_ref().ok().copied(),
        max_return: max_return.as_ref().ok().copied(),
        holds: reason.is_none(),
        established: unsolved.is_empty(),
        reason,
        net,
    }
}

/// The preconditions when X has no known portfolio: shown empty (then `established`: the ratio model is
/// infeasible with X) or not established either way.
pub fn preconditions_without_portfolio(empty: &Emptiness) -> Preconditions {
    let (established, reason) = match empty {
        Emptiness::Empty(_) => (
            true,
            "the feasible set X is empty, so no portfolio has a ratio".to_string(),
        ),
        Emptiness::Unknown(why) => (
            false,
            format!("{why}, so neither precondition could be checked"),
        ),
        Emptiness::NotEmpty => (false, "the auxiliary LPs were not solved".to_string()),
    };
    Preconditions {
        min_cvar: None,
        max_return: None,
        holds: false,
        established,
        reason: Some(reason),
        net: false,
    }
}

/// The CVaR cap of a rule: m · base for a positive base; for a non-positive base, base + (m − 1)·|base|,
/// which keeps the cap at or above the base. NaN when the base is unknown (empty X, no holdings).
pub fn resolve_cap(rule: CapRule, min_cvar: Option<f64>, current_cvar: Option<f64>) -> f64 {
    let scaled = |base: f64, m: f64| {
        if base > 0.0 {
            m * base
        } else {
            base + (m - 1.0) * base.abs()
        }
    };
    match rule {
        CapRule::Value(v) => v,
        CapRule::TimesMin(m) => min_cvar.map_or(f64::NAN, |b| scaled(b, m)),
        CapRule::TimesCurrent(m) => current_cvar.map_or(f64::NAN, |b| scaled(b, m)),
    }
}

/// The return floor of a rule; `plus_current` needs the current portfolio's expected return.
pub fn resolve_floor(rule: FloorRule, current_return: Option<f64>) -> f64 {
    match rule {
        FloorRule::Value(v) => v,
        FloorRule::PlusCurrent(d) => current_return.map_or(d, |r| r + d),
    }
}

/// Largest violation of X's constraints (with the active-CVaR budget, and an optional cap/floor) by
/// weights `x`.
pub fn verify(p: &Problem, x: &[f64], cap: Option<f64>, floor: Option<f64>) -> f64 {
    let fs = p.feasible;
    let mut worst = (x.iter().sum::<f64>() - 1.0).abs();
    for ((xi, lo), hi) in x.iter().zip(&fs.lower).zip(&fs.upper) {
        worst = worst.max(lo - xi).max(xi - hi);
    }
    for g in &fs.groups {
        let s: f64 = g.members.iter().map(|&i| x[i]).sum();
        worst = worst.max(g.min - s).max(s - g.max);
    }
    if let (Some(tau), Some(cur)) = (fs.turnover_max, &fs.current) {
        worst = worst.max(turnover(x, cur) - tau);
    }
    if let Some(a) = p.active {
        worst = worst.max(risk::active_cvar_of(p.set, x, a.benchmark, p.confidence) - a.budget);
    }
    if let Some(cap) = cap {
        worst = worst.max(risk::cvar_of(p.set, x, p.confidence) - cap);
    }
    if let Some(floor) = floor {
        worst = worst.max(floor - net_return(p, x));
    }
    worst.max(0.0)
}

/// The one-way cost of moving from the current holdings to `x`, as a fraction of the fund's value:
/// Σ_i rate_i·|x_i − current_i|; 0 without holdings (there is nothing to trade from).
pub fn cost(fs: &FeasibleSet, x: &[f64]) -> f64 {
    match &fs.current {
        Some(cur) if fs.charges_costs() => x
            .iter()
            .zip(cur)
            .zip(&fs.cost_rates)
            .map(|((a, b), r)| r * (a - b).abs())
            .sum(),
        _ => 0.0,
    }
}

/// The expected return of `x` net of the cost of getting there: μ·x − [`cost`] (μ·x itself when nothing
/// is charged).
pub fn net_return(p: &Problem, x: &[f64]) -> f64 {
    let gross = dot(&p.mu, x);
    if p.feasible.charges_costs() {
        gross - cost(p.feasible, x)
    } else {
        gross
    }
}

/// A weight change at most this large is no trade (solver round-off, well below any figure the pack
/// prints).
pub const NO_TRADE: f64 = 1e-9;

/// The trades from `current` to `x`: (asset index, weight change x_i − current_i) for every asset whose
/// weight changes by more than [`NO_TRADE`], in asset order.
pub fn trades(current: &[f64], x: &[f64]) -> Vec<(usize, f64)> {
    x.iter()
        .zip(current)
        .map(|(a, b)| a - b)
        .enumerate()
        .filter(|(_, d)| d.abs() > NO_TRADE)
        .collect()
}

/// Σ|x − current|.
pub fn turnover(x: &[f64], current: &[f64]) -> f64 {
    x.iter().zip(current).map(|(a, b)| (a - b).abs()).sum()
}

/// Inner product.
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Removes solver round-off: values within 1e-12 of a bound are set to the bound.
pub fn tidy(x: &mut [f64], fs: &FeasibleSet) {
    for (i, w) in x.iter_mut().enumerate() {
        if (*w - fs.lower[i]).abs() < 1e-12 {
            *w = fs.lower[i];
        } else if (*w - fs.upper[i]).abs() < 1e-12 {
            *w = fs.upper[i];
        }
    }
}

/// Turns an LP result into an outcome, with the post-solve check; `diagnose` explains infeasibility.
pub fn outcome(
    p: &Problem,
    r: Result<Solved, Failure>,
    cap: Option<f64>,
    floor: Option<f64>,
    diagnose: impl FnOnce() -> String,
) -> Outcome {
    match r {
        Ok(mut s) => {
            tidy(&mut s.weights, p.feasible);
            let v = verify(p, &s.weights, cap, floor);
            if !(v <= NOT_A_SOLUTION) {
                // Clarabel (through good_lp) returns a certificate of unboundedness as if it were a solution.
                return Outcome::failed(
                    Status::SolverError,
                    format!(
                        "the solver returned weights that violate the constraints by {v:.2e}, so they are not a solution (an unbounded or numerically failed LP)"
                    ),
                );
            }
            let message = (v > FEASIBILITY_TOLERANCE).then(|| format!(
                "the solver's portfolio violates a constraint by {v:.2e} (tolerance {FEASIBILITY_TOLERANCE:e}); treat with care"));
            Outcome {
                status: Status::Optimal,
                message,
                objective: Some(s.objective),
                scale: s.scale,
                weights: Some(s.weights),
                max_violation: Some(v),
            }
        }
        Err(Failure::Infeasible) => Outcome::failed(Status::Infeasible, diagnose()),
        Err(Failure::Unbounded) => Outcome::failed(
            Status::SolverError,
            "the solver reports the problem unbounded".into(),
        ),
        Err(Failure::Solver(m)) => Outcome::failed(Status::SolverError, format!("solver: {m}")),
    }
}

/// A model the solver called infeasible although a known portfolio satisfies its constraints (`witness`
/// names it): that is a numerical failure, not an established infeasibility, so the outcome becomes a
/// `solver_error` saying so. Any other outcome is returned as it is.
pub fn unless_contradicted(o: Outcome, witness: Option<String>) -> Outcome {
    match witness {
        Some(w) if o.status == Status::Infeasible => Outcome::failed(
            Status::SolverError,
            format!(
                "the solver reports the LP infeasible, but {w}, so it is not: a numerical failure of the solver; no optimum is known"
            ),
        ),
        _ => o,
    }
}

/// Whether the feasible set X is empty, as far as it was established.
#[derive(Debug, Clone, PartialEq)]
pub enum Emptiness {
    /// A portfolio in X exists (the feasibility LP found one).
    NotEmpty,
    /// X is empty; the reason names the constraints.
    Empty(String),
    /// The feasibility LP ended without a verdict (a solver failure); nothing is claimed about X.
    Unknown(String),
}

/// Explains why X itself is empty by checking simple sums and then relaxing one constraint family at a
/// time. Emptiness is claimed only from the sums or from a feasibility LP the solver calls infeasible;
/// a feasibility LP that fails otherwise leaves it [`Emptiness::Unknown`].
pub fn explain_empty(fs: &FeasibleSet, names: &[String], backend: Backend) -> Emptiness {
    let lo: f64 = fs.lower.iter().sum();
    let hi: f64 = fs.upper.iter().sum();
    if lo > 1.0 + 1e-12 {
        return Emptiness::Empty(format!(
            "the per-asset minimum weights sum to {lo:.4} > 1 (budget Σx = 1)"
        ));
    }
    if hi < 1.0 - 1e-12 {
        return Emptiness::Empty(format!(
            "the per-asset maximum weights sum to {hi:.4} < 1 (budget Σx = 1); raise limits.default_max or max_weight"
        ));
    }
    for g in &fs.groups {
        let cap: f64 = g.members.iter().map(|&i| fs.upper[i]).sum();
        let floor: f64 = g.members.iter().map(|&i| fs.lower[i]).sum();
        if g.min > cap + 1e-12 {
            return Emptiness::Empty(format!(
                "group `{}` needs at least {:.4} but its members' maximum weights sum to {cap:.4}",
                g.name, g.min
            ));
        }
        if g.max < floor - 1e-12 {
            return Emptiness::Empty(format!(
                "group `{}` allows at most {:.4} but its members' minimum weights sum to {floor:.4}",
                g.name, g.max
            ));
        }
    }
    match feasibility(fs, backend) {
        Ok(()) => Emptiness::NotEmpty,
        Err(Failure::Infeasible) => Emptiness::Empty(relaxation_hint(fs, names, backend)),
        Err(f) => Emptiness::Unknown(format!(
            "the feasibility LP of the budget, bounds, group limits and turnover limit ended without a verdict ({})",
            failure_words(&f)
        )),
    }
}

/// Solves X alone (zero objective): `Ok` when a portfolio in X exists. X is bounded (every weight between
/// its bounds), so HiGHS' "unbounded or infeasible" means infeasible here.
fn feasibility(fs: &FeasibleSet, backend: Backend) -> Result<(), Failure> {
    let lp = Lp::new(fs, false);
    lp.solve(&Lin::default(), false, backend).map(|_| ())
}

/// Which single constraint family, dropped, makes X feasible. A relaxation whose LP fails without a
/// verdict is named as unchecked rather than counted either way.
fn relaxation_hint(fs: &FeasibleSet, _names: &[String], backend: Backend) -> String {
    let mut culprits = Vec::new();
    let mut unchecked = Vec::new();
    let mut judge = |relaxed: &FeasibleSet, what: String| match feasibility(relaxed, backend) {
        Ok(()) => culprits.push(what),
        Err(Failure::Infeasible) => {}
        Err(f) => unchecked.push(format!("{what} ({})", failure_words(&f))),
    };
    if let Some(tau) = fs.turnover_max {
        let relaxed = FeasibleSet {
            turnover_max: None,
            ..fs.clone()
        };
        judge(
            &relaxed,
            format!("the turnover limit limits.turnover_max = {tau}"),
        );
    }
    for (gi, g) in fs.groups.iter().enumerate() {
        let mut relaxed = fs.clone();
        relaxed.groups.remove(gi);
        judge(
            &relaxed,
            format!("group `{}` (min {}, max {})", g.name, g.min, g.max),
        );
    }
    let unchecked = if unchecked.is_empty() {
        String::new()
    } else {
        format!(
            "; not established whether it becomes feasible without {}",
            unchecked.join(", or without ")
        )
    };
    if !culprits.is_empty() {
        format!(
            "the constraints cannot hold together; it becomes feasible without {}{unchecked}",
            culprits.join(", or without ")
        )
    } else if unchecked.is_empty() {
        "the budget, bounds, group limits and turnover limit cannot hold together; no single limit is to blame".into()
    } else {
        format!(
            "the budget, bounds, group limits and turnover limit cannot hold together{unchecked}"
        )
    }
}
