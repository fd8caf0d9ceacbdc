//! Building and solving the linear programs: a sparse model built row by row in bulk, handed to HiGHS
//! directly (highs crate) or to Clarabel through good_lp.
//!
//! The CVaR of a portfolio x enters every model through the Rockafellar & Uryasev (2000) linearisation:
//! CVaR_c(x) = min over ℓ, u of ℓ + 1/(1−c) Σ_k p_k u_k subject to u_k ≥ 0 and u_k ≥ −r_k·x − ℓ
//! (J. Risk 2(3), eq. 17). The feasible set X is written once, optionally multiplied through by a scale
//! column t for the Charnes & Cooper (1962) transformation ("Programming with linear fractional
//! functionals", Naval Research Logistics Quarterly 9): every constant right-hand side b becomes b·t.
//!
//! Why not good_lp's expressions for HiGHS: at 500 assets × 5,000 scenarios they cost more to build than
//! the rows themselves (a hash map per expression); rows written straight into one compressed sparse row
//! store cost a copy. The HiGHS model also stays alive between solves, so the cutting-plane method adds
//! its cuts to a warm-started model instead of rebuilding it.

use super::FeasibleSet;
use crate::config::Backend;
use crate::scenarios::{PARALLEL_FROM, ROWS_PER_TASK, ScenarioSet};
use good_lp::solvers::clarabel::clarabel;
use good_lp::{Expression, ProblemVariables, ResolutionError, Solution, SolverModel, variable};
use highs::{HighsModelStatus, RowProblem, Sense};
use rayon::prelude::*;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::{Duration, Instant};

/// HiGHS primal and dual feasibility tolerance used for every model (its default is 1e-7).
pub const HIGHS_TOLERANCE: f64 = 1e-9;
/// Clarabel feasibility and gap tolerance used for every model (its default is 1e-8).
pub const CLARABEL_TOLERANCE: f64 = 1e-10;

/// Wall-clock limit on each HiGHS run in seconds, as f64 bits; 0 means none. Only `tailpack bench` sets
/// it (to bound the direct LPs it times at large sizes); packs never do.
static TIME_LIMIT: AtomicU64 = AtomicU64::new(0);

/// Sets (or with `None` clears) the per-run HiGHS time limit for this process.
pub fn set_time_limit(seconds: Option<f64>) {
    TIME_LIMIT.store(seconds.map_or(0, f64::to_bits), Ordering::Relaxed);
}

/// Why an LP produced no solution.
#[derive(Debug, Clone, PartialEq)]
pub enum Failure {
    Infeasible,
    Unbounded,
    /// The solver's own words.
    Solver(String),
}

/// A column of an [`Lp`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Col(pub usize);

/// A linear function Σ a_j·col_j (no constant term).
#[derive(Debug, Clone, Default)]
pub struct Lin(pub Vec<(Col, f64)>);

impl Lin {
    /// An empty function with room for `n` terms.
    pub fn with_capacity(n: usize) -> Lin {
        Lin(Vec::with_capacity(n))
    }

    /// Adds a·col.
    pub fn add(&mut self, col: Col, a: f64) {
        self.0.push((col, a));
    }

    /// The value at column values `x`.
    pub fn eval(&self, x: &[f64]) -> f64 {
        self.0.iter().map(|(c, a)| a * x[c.0]).sum()
    }
}

/// Time spent building the model and inside the solver, and the number of solver runs.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Timing {
    pub build: Duration,
    pub solve: Duration,
    pub runs: usize,
}

impl Timing {
    /// Build plus solve.
    pub fn total(&self) -> Duration {
        self.build + self.solve
    }

    /// Adds another timing to this one.
    pub fn absorb(&mut self, other: Timing) {
        self.build += other.build;
        self.solve += other.solve;
        self.runs += other.runs;
    }
}

/// The values of the portfolio columns and the scale at the optimum, with the objective value.
#[derive(Debug, Clone)]
pub struct Solved {
    pub weights: Vec<f64>,
    pub scale: Option<f64>,
    pub objective: f64,
    /// Values of the tracked columns, in the order they were added.
    pub extra: Vec<f64>,
    /// How long building and solving took.
    pub timing: Timing,
}

/// An LP under construction: columns with bounds, and rows lo ≤ Σ a_j x_j ≤ hi in compressed sparse row form.
/// The portfolio columns (x, or z = t·x) and the optional scale t are named.
#[derive(Debug, Clone)]
pub struct Lp {
    col_lo: Vec<f64>,
    col_hi: Vec<f64>,
    row_lo: Vec<f64>,
    row_hi: Vec<f64>,
    row_start: Vec<usize>,
    row_col: Vec<u32>,
    row_val: Vec<f64>,
    pub weights: Vec<Col>,
    pub scale: Option<Col>,
    /// The turnover columns d_i ≥ |x_i − current_i| (scaled: |z_i − current_i·t|), present with current
    /// holdings and a turnover limit or a positive cost rate; empty otherwise.
    pub turnover: Vec<Col>,
    /// Further columns whose values the caller wants back (in `Solved::extra`).
    tracked: Vec<Col>,
}

const INF: f64 = f64::INFINITY;

impl Lp {
    /// Portfolio columns with the feasible set X; `scaled` applies the Charnes–Cooper scaling.
    pub fn new(fs: &FeasibleSet, scaled: bool) -> Lp {
        let mut lp = Lp {
            col_lo: Vec::new(),
            col_hi: Vec::new(),
            row_lo: Vec::new(),
            row_hi: Vec::new(),
            row_start: vec![0],
            row_col: Vec::new(),
            row_val: Vec::new(),
            weights: Vec::new(),
            scale: None,
            turnover: Vec::new(),
            tracked: Vec::new(),
        };
        let n = fs.lower.len();
        lp.weights = (0..n)
            .map(|i| {
                if scaled {
                    lp.column(0.0, INF)
                } else {
                    lp.column(fs.lower[i], fs.upper[i])
                }
            })
            .collect();
        lp.scale = scaled.then(|| lp.column(0.0, INF));
        lp.feasible_set(fs);
        lp
    }

    /// Adds a column lo ≤ x ≤ hi.
    pub fn column(&mut self, lo: f64, hi: f64) -> Col {
        self.col_lo.push(lo);
        self.col_hi.push(hi);
        Col(self.col_lo.len() - 1)
    }

    /// Replaces the bounds of column `c`.
    pub fn bound(&mut self, c: Col, lo: f64, hi: f64) {
        self.col_lo[c.0] = lo;
        self.col_hi[c.0] = hi;
    }

    /// Number of columns and rows.
    pub fn size(&self) -> (usize, usize) {
        (self.col_lo.len(), self.row_lo.len())
    }

    /// Adds the row lo ≤ Σ a_j·col_j ≤ hi.
    pub fn row(&mut self, lo: f64, hi: f64, terms: impl IntoIterator<Item = (Col, f64)>) {
        for (c, a) in terms {
            self.row_col.push(c.0 as u32);
            self.row_val.push(a);
        }
        self.row_start.push(self.row_col.len());
        self.row_lo.push(lo);
        self.row_hi.push(hi);
    }

    /// Adds `f ≥ b`.
    pub fn at_least(&mut self, f: Lin, b: f64) {
        self.row(b, INF, f.0);
    }

    /// Adds `f ≤ b`.
    pub fn at_most(&mut self, f: Lin, b: f64) {
        self.row(-INF, b, f.0);
    }

    /// Adds a row of X: `lo ≤ f ≤ hi` with constant bounds, or `lo·t ≤ f ≤ hi·t` when scaled (one row per
    /// finite side, as the scaled bounds are not constant).
    fn x_row(&mut self, f: Lin, lo: f64, hi: f64) {
        match self.scale {
            None => self.row(lo, hi, f.0),
            Some(t) if lo == hi => self.row(0.0, 0.0, f.0.into_iter().chain([(t, -lo)])),
            Some(t) => {
                if lo.is_finite() {
                    self.row(0.0, INF, f.0.iter().copied().chain([(t, -lo)]));
                }
                if hi.is_finite() {
                    self.row(-INF, 0.0, f.0.into_iter().chain([(t, -hi)]));
                }
            }
        }
    }

    fn sum_of(&self, members: impl Iterator<Item = usize>) -> Lin {
        Lin(members.map(|i| (self.weights[i], 1.0)).collect())
    }

    fn feasible_set(&mut self, fs: &FeasibleSet) {
        let n = self.weights.len();
        let budget = self.sum_of(0..n);
        self.x_row(budget, 1.0, 1.0);
        if self.scale.is_some() {
            for i in 0..n {
                let lo = if fs.lower[i] > 0.0 { fs.lower[i] } else { -INF };
                self.x_row(Lin(vec![(self.weights[i], 1.0)]), lo, fs.upper[i]);
            }
        }
        for g in &fs.groups {
            let total = self.sum_of(g.members.iter().copied());
            let lo = if g.min > 0.0 { g.min } else { -INF };
            let hi = if g.max < 1.0 { g.max } else { INF };
            if lo.is_finite() || hi.is_finite() {
                self.x_row(total, lo, hi);
            }
        }
        if let Some(cur) = &fs.current
            && (fs.turnover_max.is_some() || fs.charges_costs())
        {
            self.turnover(fs.turnover_max, cur);
        }
    }

    /// d_i ≥ |x_i − current_i| (scaled: |z_i − current_i·t|), and Σ d_i ≤ τ with a turnover limit τ.
    fn turnover(&mut self, tau: Option<f64>, current: &[f64]) {
        let d: Vec<Col> = (0..current.len()).map(|_| self.column(0.0, INF)).collect();
        for (i, &di) in d.iter().enumerate() {
            let w = self.weights[i];
            // d_i − x_i ≥ −current_i and d_i + x_i ≥ current_i
            self.x_row(Lin(vec![(di, 1.0), (w, -1.0)]), -current[i], INF);
            self.x_row(Lin(vec![(di, 1.0), (w, 1.0)]), current[i], INF);
        }
        if let Some(tau) = tau {
            let total = Lin(d.iter().map(|&c| (c, 1.0)).collect());
            self.x_row(total, -INF, tau);
        }
        self.turnover = d;
    }

    /// μ·x as a function of the portfolio columns.
    pub fn expected_return(&self, mu: &[f64]) -> Lin {
        Lin(self.weights.iter().zip(mu).map(|(&w, &m)| (w, m)).collect())
    }

    /// μ·x − Σ rate_i·d_i: the expected return net of the one-way cost of moving from the current
    /// holdings, linear through the turnover columns (with those columns absent, or every rate zero, it is
    /// μ·x itself). Wherever it is maximised or bounded below, each d_i with a positive rate settles at
    /// |x_i − current_i|. In the Charnes–Cooper LP the columns are z and t·d, so the same function is the
    /// scaled net return: homogeneous, it needs no scaling of its own.
    pub fn net_return(&self, mu: &[f64], rates: &[f64]) -> Lin {
        let mut f = self.expected_return(mu);
        for (&d, &r) in self.turnover.iter().zip(rates) {
            if r > 0.0 {
                f.add(d, -r);
            }
        }
        f
    }

    /// Adds ℓ and u_k with the rows u_k + r_k·x + ℓ ≥ 0, and returns ℓ + 1/(1−c) Σ p_k u_k
    /// (Rockafellar & Uryasev 2000, eq. 17). The rows are homogeneous, so they need no scaling.
    pub fn cvar(&mut self, set: &ScenarioSet, c: f64) -> Lin {
        self.cvar_block(set, c, None)
    }

    /// The same block for the active loss b_k − r_k·x against a benchmark returning b_k in scenario k:
    /// rows u_k + r_k·x + ℓ ≥ b_k (scaled: u_k + r_k·z + ℓ − b_k·t ≥ 0, the constant b_k times t like
    /// every constant of the Charnes–Cooper LP). Returns ℓ + 1/(1−c) Σ p_k u_k, the active CVaR_c at the
    /// optimum of any LP that bounds it above (Rockafellar & Uryasev 2000, eq. 17, with the loss
    /// b_k − r_k·x in place of −r_k·x).
    pub fn active_cvar(&mut self, set: &ScenarioSet, benchmark: &[f64], c: f64) -> Lin {
        self.cvar_block(set, c, Some(benchmark))
    }

    fn cvar_block(&mut self, set: &ScenarioSet, c: f64, benchmark: Option<&[f64]>) -> Lin {
        let ell = self.column(-INF, INF);
        let first_u = self.col_lo.len();
        for _ in 0..set.len() {
            self.column(0.0, INF);
        }
        self.row_col.reserve(set.len() * (set.width() + 3));
        self.row_val.reserve(set.len() * (set.width() + 3));
        let mut total = Lin::with_capacity(set.len() + 1);
        total.add(ell, 1.0);
        for k in 0..set.len() {
            let uk = first_u + k;
            self.row_col.extend([uk as u32, ell.0 as u32]);
            self.row_val.extend([1.0, 1.0]);
            for (&r, w) in set.row(k).iter().zip(&self.weights) {
                if r != 0.0 {
                    self.row_col.push(w.0 as u32);
                    self.row_val.push(r);
                }
            }
            let offset = benchmark.map_or(0.0, |b| b[k]);
            let lo = match self.scale {
                Some(t) if offset != 0.0 => {
                    self.row_col.push(t.0 as u32);
                    self.row_val.push(-offset);
                    0.0
                }
                Some(_) => 0.0,
                None => offset,
            };
            self.row(lo, INF, []);
            total.add(Col(uk), set.probabilities[k] / (1.0 - c));
        }
        total
    }

    /// Adds a limit `f ≤ hi` on a function of the portfolio, as a row of X: `f ≤ hi·t` in the
    /// Charnes–Cooper LP.
    pub fn limit(&mut self, f: Lin, hi: f64) {
        self.x_row(f, -INF, hi);
    }

    /// Adds a column whose value is returned in `Solved::extra`.
    pub fn tracked(&mut self, lo: f64, hi: f64) -> Col {
        let c = self.column(lo, hi);
        self.tracked.push(c);
        c
    }

    /// The CVaR block of the cutting-plane method (Künzi-Bay & Mayer 2006, "Computational aspects of
    /// minimizing conditional value-at-risk", Computational Management Science 3): columns ℓ (free) and
    /// one w_g ≥ 0 per group of scenarios (tracked, in that order; `groups` ≥ 1, see [`CutColumns`]); the
    /// cuts are added by the caller ([`cut_terms`]). Returns ℓ + Σ_g w_g/(1−c).
    pub fn cvar_cuts(&mut self, c: f64, groups: usize) -> (Lin, CutColumns) {
        let groups = groups.max(1);
        let at = self.tracked.len();
        let ell = self.tracked(-INF, INF);
        let mut f = Lin::with_capacity(groups + 1);
        f.add(ell, 1.0);
        let w = self.tracked(0.0, INF);
        f.add(w, 1.0 / (1.0 - c));
        for _ in 1..groups {
            let wg = self.tracked(0.0, INF);
            f.add(wg, 1.0 / (1.0 - c));
        }
        (f, CutColumns { ell, w, groups, at })
    }

    /// Solves with the chosen backend.
    pub fn solve(
        &self,
        objective: &Lin,
        maximise: bool,
        backend: Backend,
    ) -> Result<Solved, Failure> {
        match backend {
            Backend::Highs => self.to_highs(objective, maximise)?.solve(),
            Backend::Clarabel => self.solve_clarabel(objective, maximise),
        }
    }

    /// Hands the model to HiGHS; the returned model can be solved, given rows and solved again.
    pub fn to_highs(&self, objective: &Lin, maximise: bool) -> Result<HighsLp, Failure> {
        let start = Instant::now();
        let bounds = [&self.col_lo, &self.col_hi, &self.row_lo, &self.row_hi];
        if bounds.iter().any(|b| b.iter().any(|v| v.is_nan()))
            || objective.0.iter().any(|(_, a)| !a.is_finite())
        {
            return Err(Failure::Solver(
                "a bound or coefficient of the LP is not a number (an unresolved cap or floor)"
                    .into(),
            ));
        }
        let mut cost = vec![0.0; self.col_lo.len()];
        for &(c, a) in &objective.0 {
            cost[c.0] += a;
        }
        let mut pb = RowProblem::default();
        let cols: Vec<highs::Col> = (0..self.col_lo.len())
            .map(|j| pb.add_column(cost[j], self.col_lo[j]..=self.col_hi[j]))
            .collect();
        for r in 0..self.row_lo.len() {
            let span = self.row_start[r]..self.row_start[r + 1];
            let terms = self.row_col[span.clone()]
                .iter()
                .zip(&self.row_val[span])
                .map(|(&j, &a)| (cols[j as usize], a));
            pb.add_row(self.row_lo[r]..=self.row_hi[r], terms);
        }
        let sense = if maximise {
            Sense::Maximise
        } else {
            Sense::Minimise
        };
        let mut model = pb
            .try_optimise(sense)
            .map_err(|e| Failure::Solver(format!("HiGHS rejected the model: {e:?}")))?;
        model.make_quiet();
        model.set_option("primal_feasibility_tolerance", HIGHS_TOLERANCE);
        model.set_option("dual_feasibility_tolerance", HIGHS_TOLERANCE);
        model.set_option("threads", 1);
        model.set_option("random_seed", 0);
        let limit = f64::from_bits(TIME_LIMIT.load(Ordering::Relaxed));
        if limit > 0.0 {
            model.set_option("time_limit", limit);
        }
        Ok(HighsLp {
            model: Some(model),
            cols,
            objective: objective.clone(),
            weights: self.weights.clone(),
            scale: self.scale,
            tracked: self.tracked.clone(),
            base_rows: self.row_lo.len(),
            added_lo: Vec::new(),
            activity: Vec::new(),
            timing: Timing {
                build: start.elapsed(),
                ..Timing::default()
            },
        })
    }

    fn solve_clarabel(&self, objective: &Lin, maximise: bool) -> Result<Solved, Failure> {
        let start = Instant::now();
        let mut vars = ProblemVariables::new();
        let v: Vec<good_lp::Variable> = (0..self.col_lo.len())
            .map(|j| vars.add(variable().min(self.col_lo[j]).max(self.col_hi[j])))
            .collect();
        let goal = expression(&v, objective.0.iter().map(|(c, a)| (c.0, *a)));
        let unsolved = if maximise {
            vars.maximise(goal)
        } else {
            vars.minimise(goal)
        };
        let mut m = clarabel(unsolved);
        m.settings()
            .tol_feas(CLARABEL_TOLERANCE)
            .tol_gap_abs(CLARABEL_TOLERANCE)
            .tol_gap_rel(CLARABEL_TOLERANCE)
            .max_iter(500)
            .verbose(false);
        self.constrain(&mut m, &v);
        let built = start.elapsed();
        let solved = m.solve().map_err(|e| match e {
            ResolutionError::Infeasible => Failure::Infeasible,
            ResolutionError::Unbounded => Failure::Unbounded,
            other => Failure::Solver(other.to_string()),
        })?;
        let x: Vec<f64> = v.iter().map(|&var| solved.value(var)).collect();
        Ok(read_solution(
            &x,
            objective,
            &self.weights,
            self.scale,
            &self.tracked,
            Timing {
                build: built,
                solve: start.elapsed() - built,
                runs: 1,
            },
        ))
    }

    /// Hands every row to a good_lp model over the columns `v`: an equality, or its finite bounds.
    fn constrain(&self, m: &mut impl SolverModel, v: &[good_lp::Variable]) {
        for r in 0..self.row_lo.len() {
            let span = self.row_start[r]..self.row_start[r + 1];
            let e = expression(
                v,
                self.row_col[span.clone()]
                    .iter()
                    .zip(&self.row_val[span])
                    .map(|(&j, &a)| (j as usize, a)),
            );
            let (lo, hi) = (self.row_lo[r], self.row_hi[r]);
            if lo == hi {
                m.add_constraint(e.eq(lo));
            } else {
                if lo.is_finite() {
                    m.add_constraint(e.clone().geq(lo));
                }
                if hi.is_finite() {
                    m.add_constraint(e.leq(hi));
                }
            }
        }
    }
}

/// Σ a·v_j over (column j, coefficient a) terms, in their order.
fn expression(v: &[good_lp::Variable], terms: impl Iterator<Item = (usize, f64)>) -> Expression {
    let mut e = Expression::default();
    for (j, a) in terms {
        e.add_mul(a, v[j]);
    }
    e
}

fn read_solution(
    x: &[f64],
    objective: &Lin,
    weights: &[Col],
    scale: Option<Col>,
    tracked: &[Col],
    timing: Timing,
) -> Solved {
    Solved {
        weights: weights.iter().map(|c| x[c.0]).collect(),
        scale: scale.map(|t| x[t.0]),
        objective: objective.eval(x),
        extra: tracked.iter().map(|c| x[c.0]).collect(),
        timing,
    }
}

/// The columns ℓ and w_1…w_G of a cutting-plane CVaR block. With G > 1 the scenarios are split into G
/// contiguous groups and each group's tail term has its own w_g and its own cuts — the multi-cut form of
/// the L-shaped method (Birge & Louveaux 1988, "A multicut algorithm for two-stage stochastic linear
/// programs", European Journal of Operational Research 34): a round adds up to G cuts, which a portfolio
/// of many assets strictly between their bounds needs, as an optimal vertex of the cut LP has at most as
/// many such weights as it has binding rows. With G = 1 it is Künzi-Bay & Mayer's single cut.
#[derive(Debug, Clone, Copy)]
pub struct CutColumns {
    pub ell: Col,
    /// w_1; w_g is the column g − 1 places after it.
    pub w: Col,
    pub groups: usize,
    /// Where ℓ's value is in `Solved::extra` (w_1…w_G follow it).
    pub at: usize,
}

impl CutColumns {
    /// The column w_g of group `g` (from 0).
    pub fn w_of(&self, g: usize) -> Col {
        Col(self.w.0 + g)
    }

    /// The scenarios of group `g` among `scenarios`: the g-th of G contiguous, nearly equal ranges.
    pub fn group(&self, g: usize, scenarios: usize) -> std::ops::Range<usize> {
        g * scenarios / self.groups..(g + 1) * scenarios / self.groups
    }
}

/// A cut of an active-CVaR block: the cut of [`cut_terms`] for the active loss b_k − r_k·x, that is
/// w + mass·ℓ + Σ_i a_i x_i ≥ Σ_{k∈K} p_k b_k (Künzi-Bay & Mayer 2006, eq. 9, with the benchmark's return
/// as a constant of each loss). Returns the row's lower bound and its terms; in the Charnes–Cooper LP
/// (`scale` given) the constant moves to the left times t and the bound is 0.
pub fn active_cut_terms(
    set: &ScenarioSet,
    cut: &[usize],
    weights: &[Col],
    (cc, group): (CutColumns, usize),
    benchmark: &[f64],
    scale: Option<Col>,
) -> (f64, Vec<(Col, f64)>) {
    let mut terms = cut_terms(set, cut, weights, cc, group);
    let constant: f64 = cut
        .iter()
        .map(|&k| set.probabilities[k] * benchmark[k])
        .sum();
    match scale {
        Some(t) => {
            terms.push((t, -constant));
            (0.0, terms)
        }
        None => (constant, terms),
    }
}

/// The cut w + mass·ℓ + Σ_i a_i x_i ≥ 0 for a scenario subset K, with mass = Σ_{k∈K} p_k and
/// a = Σ_{k∈K} p_k r_k — that is w ≥ Σ_{k∈K} p_k (−r_k·x − ℓ) (Künzi-Bay & Mayer 2006, eq. 9), where w is
/// w_g of the group K lies in ([`CutColumns::w_of`]).
/// The sums run over fixed blocks of K, in parallel for large sets, and the blocks are added in order,
/// so the cut is the same whatever the number of threads.
pub fn cut_terms(
    set: &ScenarioSet,
    cut: &[usize],
    weights: &[Col],
    cc: CutColumns,
    group: usize,
) -> Vec<(Col, f64)> {
    let block = |ks: &[usize]| {
        let mut coef = vec![0.0; set.width()];
        let mut mass = 0.0;
        for &k in ks {
            let p = set.probabilities[k];
            mass += p;
            for (a, r) in coef.iter_mut().zip(set.row(k)) {
                *a += p * r;
            }
        }
        (mass, coef)
    };
    let blocks: Vec<(f64, Vec<f64>)> = if cut.len() * set.width() < PARALLEL_FROM {
        cut.chunks(ROWS_PER_TASK).map(block).collect()
    } else {
        cut.par_chunks(ROWS_PER_TASK).map(block).collect()
    };
    let mut coef = vec![0.0; set.width()];
    let mut mass = 0.0;
    for (m, c) in blocks {
        mass += m;
        coef.iter_mut().zip(c).for_each(|(a, b)| *a += b);
    }
    let mut terms = Vec::with_capacity(weights.len() + 2);
    terms.push((cc.w_of(group), 1.0));
    terms.push((cc.ell, mass));
    terms.extend(weights.iter().zip(coef).map(|(&x, a)| (x, a)));
    terms
}

/// An LP loaded into HiGHS. Rows added after a solve keep the previous basis, so the next solve is a warm
/// start of the dual simplex method.
pub struct HighsLp {
    model: Option<highs::Model>,
    cols: Vec<highs::Col>,
    objective: Lin,
    weights: Vec<Col>,
    scale: Option<Col>,
    tracked: Vec<Col>,
    /// Rows the model was loaded with; rows added later ([`HighsLp::rows_at_least`]) follow them.
    base_rows: usize,
    /// The lower bound of every added row, in row order.
    added_lo: Vec<f64>,
    /// Every row's activity at the last optimum (empty when the last solve had none).
    activity: Vec<f64>,
    /// Build and solve time so far.
    pub timing: Timing,
}

impl HighsLp {
    /// Runs HiGHS and reads the solution; the model stays loaded for further rows.
    pub fn solve(&mut self) -> Result<Solved, Failure> {
        let start = Instant::now();
        let model = self.model.take().expect("a loaded model");
        let solved = model
            .try_solve()
            .map_err(|e| Failure::Solver(format!("HiGHS returned status {e:?}")));
        self.timing.solve += start.elapsed();
        self.timing.runs += 1;
        let solved = solved?;
        let status = solved.status();
        self.activity.clear();
        let result = match status {
            HighsModelStatus::Optimal => {
                let solution = solved.get_solution();
                let x = solution.columns().to_vec();
                self.activity = solution.rows().to_vec();
                Ok(read_solution(
                    &x,
                    &self.objective,
                    &self.weights,
                    self.scale,
                    &self.tracked,
                    self.timing,
                ))
            }
            HighsModelStatus::Infeasible | HighsModelStatus::UnboundedOrInfeasible => {
                Err(Failure::Infeasible)
            }
            HighsModelStatus::Unbounded => Err(Failure::Unbounded),
            other => Err(Failure::Solver(format!("HiGHS model status {other:?}"))),
        };
        self.model = Some(solved.into());
        result
    }

    /// Replaces the objective of the loaded model (same sense); the last basis stays, so the next solve
    /// starts from it.
    pub fn objective(&mut self, objective: &Lin) {
        let start = Instant::now();
        let mut cost = vec![0.0; self.cols.len()];
        for &(c, a) in &objective.0 {
            cost[c.0] += a;
        }
        let model = self.model.as_mut().expect("a loaded model");
        for (&col, c) in self.cols.iter().zip(cost) {
            model.change_column_cost(col, c);
        }
        self.objective = objective.clone();
        self.timing.build += start.elapsed();
    }

    /// Replaces the bounds of column `c` of the loaded model; the last basis stays.
    pub fn bound(&mut self, c: Col, lo: f64, hi: f64) {
        let model = self.model.as_mut().expect("a loaded model");
        model.change_column_bounds(self.cols[c.0], lo..=hi);
    }

    /// Adds the rows lo ≤ Σ a_j·col_j (no upper bound) to the loaded model in one call: HiGHS brings its
    /// copies of the matrix up to date once per call, so a round of many cuts added row by row cost a
    /// pass over the whole matrix per row.
    pub fn rows_at_least(&mut self, rows: &[(f64, Vec<(Col, f64)>)]) {
        if rows.is_empty() {
            return;
        }
        let start = Instant::now();
        let lower: Vec<f64> = rows.iter().map(|r| r.0).collect();
        let upper = vec![INF; rows.len()];
        let nnz: usize = rows.iter().map(|r| r.1.len()).sum();
        let mut starts = Vec::with_capacity(rows.len());
        let mut index = Vec::with_capacity(nnz);
        let mut value = Vec::with_capacity(nnz);
        for (_, terms) in rows {
            starts.push(index.len() as highs_sys::HighsInt);
            for &(c, a) in terms {
                index.push(self.cols[c.0].index() as highs_sys::HighsInt);
                value.push(a);
            }
        }
        let model = self.model.as_mut().expect("a loaded model");
        // SAFETY: the pointer is the loaded model's own HiGHS instance, alive for the call; `lower` and
        // `upper` hold one entry per row, `starts` one per row, `index` and `value` `nnz` entries each, as
        // Highs_addRows reads them (highs_c_api.h), and HiGHS copies them before returning.
        let status = unsafe {
            highs_sys::Highs_addRows(
                model.as_mut_ptr(),
                rows.len() as highs_sys::HighsInt,
                lower.as_ptr(),
                upper.as_ptr(),
                nnz as highs_sys::HighsInt,
                starts.as_ptr(),
                index.as_ptr(),
                value.as_ptr(),
            )
        };
        assert!(
            status != highs_sys::kHighsStatusError,
            "HiGHS refused {} cut rows",
            rows.len()
        );
        self.added_lo.extend(lower);
        self.timing.build += start.elapsed();
    }

    /// Makes every row added so far permanent: [`HighsLp::drop_slack_rows`] keeps them.
    pub fn keep_rows(&mut self) {
        self.base_rows += self.added_lo.len();
        self.added_lo.clear();
        self.activity.clear();
    }

    /// Deletes the added rows that are slack at the last optimum (activity above the lower bound by more
    /// than a relative 1e-9): such a row's slack is basic, so the basis stays valid and the next solve
    /// still starts from it. Returns how many were deleted; none without a last optimum.
    pub fn drop_slack_rows(&mut self) -> usize {
        let rows = self.base_rows + self.added_lo.len();
        if self.activity.len() != rows {
            return 0;
        }
        let mut mask: Vec<highs_sys::HighsInt> = (0..rows)
            .map(|i| {
                let slack = i >= self.base_rows && {
                    let lo = self.added_lo[i - self.base_rows];
                    self.activity[i] > lo + 1e-9 * (1.0 + lo.abs())
                };
                slack as highs_sys::HighsInt
            })
            .collect();
        let dropped = mask.iter().filter(|&&m| m == 1).count();
        if dropped == 0 {
            return 0;
        }
        let start = Instant::now();
        let keep: Vec<bool> = mask.iter().map(|&m| m == 0).collect();
        let model = self.model.as_mut().expect("a loaded model");
        // SAFETY: the pointer is the loaded model's own HiGHS instance; `mask` has one entry per row of
        // the model, as Highs_deleteRowsByMask reads and rewrites it (highs_c_api.h).
        let status =
            unsafe { highs_sys::Highs_deleteRowsByMask(model.as_mut_ptr(), mask.as_mut_ptr()) };
        assert!(
            status != highs_sys::kHighsStatusError,
            "HiGHS refused to delete {dropped} slack cut rows"
        );
        let base = self.base_rows;
        let mut k = 0;
        self.added_lo.retain(|_| {
            k += 1;
            keep[base + k - 1]
        });
        self.activity.clear();
        self.timing.build += start.elapsed();
        dropped
    }

    /// Adds the row lo ≤ Σ a_j·col_j ≤ hi to the loaded model.
    pub fn row(&mut self, lo: f64, hi: f64, terms: &[(Col, f64)]) {
        let start = Instant::now();
        let model = self.model.as_mut().expect("a loaded model");
        model.add_row(lo..=hi, terms.iter().map(|&(c, a)| (self.cols[c.0], a)));
        self.timing.build += start.elapsed();
    }
}

/// Solver name and version for the run record.
pub fn backend_description(backend: Backend) -> String {
    match backend {
        Backend::Highs => "HiGHS (dual simplex, highs crate 2.4)".to_string(),
        Backend::Clarabel => "Clarabel 0.11 (interior point, via good_lp 1.15)".to_string(),
    }
}
