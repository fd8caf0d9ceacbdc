//! Building and solving the linear programs through good_lp, with HiGHS or Clarabel.
//!
//! The CVaR of a portfolio x enters every model through the Rockafellar & Uryasev (2000) linearisation:
//! CVaR_c(x) = min over ℓ, u of ℓ + 1/(1−c) Σ_k p_k u_k subject to u_k ≥ 0 and u_k ≥ −r_k·x − ℓ
//! (J. Risk 2(3), eq. 17). The feasible set X is written once, optionally multiplied through by a scale
//! variable t for the Charnes & Cooper (1962) transformation ("Programming with linear fractional
//! functionals", Naval Research Logistics Quarterly 9): every constant right-hand side b becomes b·t.

use super::FeasibleSet;
use crate::config::Backend;
use crate::scenarios::ScenarioSet;
use good_lp::solvers::clarabel::clarabel;
use good_lp::solvers::highs::highs;
use good_lp::{
    Constraint, Expression, ProblemVariables, ResolutionError, Solution, SolverModel, Variable,
    variable,
};

/// HiGHS primal and dual feasibility tolerance used for every model (its default is 1e-7).
pub const HIGHS_TOLERANCE: f64 = 1e-9;
/// Clarabel feasibility and gap tolerance used for every model (its default is 1e-8).
pub const CLARABEL_TOLERANCE: f64 = 1e-10;

/// Why an LP produced no solution.
#[derive(Debug, Clone, PartialEq)]
pub enum Failure {
    Infeasible,
    Unbounded,
    /// The solver's own words.
    Solver(String),
}

/// An LP under construction: the portfolio columns (x, or z = t·x), the optional scale t, and rows.
pub struct Lp {
    vars: ProblemVariables,
    rows: Vec<Constraint>,
    pub weights: Vec<Variable>,
    pub scale: Option<Variable>,
    /// Further columns whose values the caller wants back (in `Solved::extra`).
    tracked: Vec<Variable>,
}

/// The values of the portfolio columns and the scale at the optimum, with the objective value.
#[derive(Debug, Clone)]
pub struct Solved {
    pub weights: Vec<f64>,
    pub scale: Option<f64>,
    pub objective: f64,
    /// Values of the tracked columns, in the order they were added.
    pub extra: Vec<f64>,
}

impl Lp {
    /// Portfolio columns with the feasible set X; `scaled` applies the Charnes–Cooper scaling.
    pub fn new(fs: &FeasibleSet, scaled: bool) -> Lp {
        let mut vars = ProblemVariables::new();
        let n = fs.lower.len();
        let weights: Vec<Variable> = if scaled {
            vars.add_vector(variable().min(0.0), n)
        } else {
            (0..n)
                .map(|i| vars.add(variable().min(fs.lower[i]).max(fs.upper[i])))
                .collect()
        };
        let scale = scaled.then(|| vars.add(variable().min(0.0)));
        let mut lp = Lp {
            vars,
            rows: Vec::new(),
            weights,
            scale,
            tracked: Vec::new(),
        };
        lp.feasible_set(fs);
        lp
    }

    /// `b` times the scale (b itself when unscaled).
    fn rhs(&self, b: f64) -> Expression {
        match self.scale {
            Some(t) => b * t,
            None => Expression::from(b),
        }
    }

    fn sum_of(&self, members: impl Iterator<Item = usize>) -> Expression {
        let mut e = Expression::with_capacity(self.weights.len());
        for i in members {
            e.add_mul(1.0, self.weights[i]);
        }
        e
    }

    fn feasible_set(&mut self, fs: &FeasibleSet) {
        let n = self.weights.len();
        let budget = self.sum_of(0..n);
        self.rows.push(budget.eq(self.rhs(1.0)));
        if self.scale.is_some() {
            for i in 0..n {
                if fs.lower[i] > 0.0 {
                    self.rows
                        .push(Expression::from(self.weights[i]).geq(self.rhs(fs.lower[i])));
                }
                self.rows
                    .push(Expression::from(self.weights[i]).leq(self.rhs(fs.upper[i])));
            }
        }
        for g in &fs.groups {
            let total = self.sum_of(g.members.iter().copied());
            if g.min > 0.0 {
                self.rows.push(total.clone().geq(self.rhs(g.min)));
            }
            if g.max < 1.0 {
                self.rows.push(total.leq(self.rhs(g.max)));
            }
        }
        if let (Some(tau), Some(cur)) = (fs.turnover_max, &fs.current) {
            self.turnover(tau, cur);
        }
    }

    /// d_i ≥ |x_i − current_i| (scaled: |z_i − current_i·t|), Σ d_i ≤ τ.
    fn turnover(&mut self, tau: f64, current: &[f64]) {
        let d = self.vars.add_vector(variable().min(0.0), current.len());
        let mut total = Expression::with_capacity(d.len());
        for (i, &di) in d.iter().enumerate() {
            let diff = Expression::from(self.weights[i]) - self.rhs(current[i]);
            self.rows.push(Expression::from(di).geq(diff.clone()));
            self.rows.push(Expression::from(di).geq(-diff));
            total.add_mul(1.0, di);
        }
        self.rows.push(total.leq(self.rhs(tau)));
    }

    /// μ·x as an expression of the portfolio columns.
    pub fn expected_return(&self, mu: &[f64]) -> Expression {
        let mut e = Expression::with_capacity(mu.len());
        for (m, w) in mu.iter().zip(&self.weights) {
            e.add_mul(*m, *w);
        }
        e
    }

    /// Adds ℓ and u_k with the rows u_k + r_k·x + ℓ ≥ 0, and returns ℓ + 1/(1−c) Σ p_k u_k
    /// (Rockafellar & Uryasev 2000, eq. 17). The rows are homogeneous, so they need no scaling.
    pub fn cvar(&mut self, set: &ScenarioSet, c: f64) -> Expression {
        let ell = self.vars.add(variable());
        let u = self.vars.add_vector(variable().min(0.0), set.len());
        let mut total = Expression::with_capacity(set.len() + 1);
        total.add_mul(1.0, ell);
        for (k, &uk) in u.iter().enumerate() {
            let mut row = Expression::with_capacity(set.width() + 2);
            row.add_mul(1.0, uk);
            row.add_mul(1.0, ell);
            for (r, w) in set.row(k).iter().zip(&self.weights) {
                if *r != 0.0 {
                    row.add_mul(*r, *w);
                }
            }
            self.rows.push(row.geq(0.0));
            total.add_mul(set.probabilities[k] / (1.0 - c), uk);
        }
        total
    }

    /// Adds a column whose value is returned in `Solved::extra`.
    pub fn tracked(&mut self, def: good_lp::VariableDefinition) -> Variable {
        let v = self.vars.add(def);
        self.tracked.push(v);
        v
    }

    /// The CVaR block of the cutting-plane method (Künzi-Bay & Mayer 2006, "Computational aspects of
    /// minimizing conditional value-at-risk", Computational Management Science 3): columns ℓ (free) and
    /// w ≥ 0 (tracked, in that order) with one row per cut K ⊆ scenarios,
    /// w ≥ Σ_{k∈K} p_k (−r_k·x − ℓ); returns ℓ + w/(1−c). With every subset as a cut this is exactly
    /// CVaR (w = Σ_k p_k (L_k − ℓ)+), so the cuts generated so far give a relaxation.
    pub fn cvar_cuts(&mut self, set: &ScenarioSet, c: f64, cuts: &[Vec<usize>]) -> Expression {
        let ell = self.tracked(variable());
        let w = self.tracked(variable().min(0.0));
        for cut in cuts {
            let mut coef = vec![0.0; set.width()];
            let mut mass = 0.0;
            for &k in cut {
                mass += set.probabilities[k];
                for (a, r) in coef.iter_mut().zip(set.row(k)) {
                    *a += set.probabilities[k] * r;
                }
            }
            let mut row = Expression::with_capacity(set.width() + 2);
            row.add_mul(1.0, w);
            row.add_mul(mass, ell);
            for (a, x) in coef.iter().zip(&self.weights) {
                row.add_mul(*a, *x);
            }
            self.rows.push(row.geq(0.0));
        }
        let mut total = Expression::with_capacity(2);
        total.add_mul(1.0, ell);
        total.add_mul(1.0 / (1.0 - c), w);
        total
    }

    /// Adds a row.
    pub fn push(&mut self, row: Constraint) {
        self.rows.push(row);
    }

    /// Solves with the chosen backend.
    pub fn solve(
        self,
        objective: Expression,
        maximise: bool,
        backend: Backend,
    ) -> Result<Solved, Failure> {
        let Lp {
            vars,
            rows,
            weights,
            scale,
            tracked,
        } = self;
        let unsolved = if maximise {
            vars.maximise(objective.clone())
        } else {
            vars.minimise(objective.clone())
        };
        let read = |s: &dyn Solution| Solved {
            weights: weights.iter().map(|v| s.value(*v)).collect(),
            scale: scale.map(|t| s.value(t)),
            objective: objective.eval_with(&SolutionRef(s)),
            extra: tracked.iter().map(|v| s.value(*v)).collect(),
        };
        match backend {
            Backend::Highs => {
                let mut m = highs(unsolved)
                    .set_option("primal_feasibility_tolerance", HIGHS_TOLERANCE)
                    .set_option("dual_feasibility_tolerance", HIGHS_TOLERANCE)
                    .set_option("threads", 1)
                    .set_option("random_seed", 0);
                for r in rows {
                    m.add_constraint(r);
                }
                m.solve().map(|s| read(&s)).map_err(failure)
            }
            Backend::Clarabel => {
                let mut m = clarabel(unsolved);
                m.settings()
                    .tol_feas(CLARABEL_TOLERANCE)
                    .tol_gap_abs(CLARABEL_TOLERANCE)
                    .tol_gap_rel(CLARABEL_TOLERANCE)
                    .max_iter(500)
                    .verbose(false);
                for r in rows {
                    m.add_constraint(r);
                }
                m.solve().map(|s| read(&s)).map_err(failure)
            }
        }
    }
}

/// Lets `eval_with` read values through a trait object.
struct SolutionRef<'a>(&'a dyn Solution);

impl Solution for SolutionRef<'_> {
    fn status(&self) -> good_lp::solvers::SolutionStatus {
        self.0.status()
    }
    fn value(&self, v: Variable) -> f64 {
        self.0.value(v)
    }
}

fn failure(e: ResolutionError) -> Failure {
    match e {
        ResolutionError::Infeasible => Failure::Infeasible,
        ResolutionError::Unbounded => Failure::Unbounded,
        other => Failure::Solver(other.to_string()),
    }
}

/// Solver name and version for the run record.
pub fn backend_description(backend: Backend) -> String {
    match backend {
        Backend::Highs => "HiGHS (dual simplex, via good_lp 1.15 / highs 2.4)".to_string(),
        Backend::Clarabel => "Clarabel 0.11 (interior point, via good_lp 1.15)".to_string(),
    }
}
