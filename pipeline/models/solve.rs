//! Every family solved on one problem: the one function the run, the walk-forward backtest and the bench
//! take their models from ([`solve_all`]), so the three cannot drift apart.
//!
//! The order is fixed: whether X is empty (bound sums, then a feasibility LP; with an active-CVaR budget,
//! the LP of the minimum active CVaR over X against the budget), the two auxiliary LPs over
//! X (minimum CVaR, maximum expected return), the cap and floor rules resolved against them and the
//! reference portfolio, then each family of [`Family::ALL`] in turn. Every outcome claims only what was
//! established: X called empty only when it was shown empty, a cap or floor called out of reach only
//! against a solved auxiliary LP, and a solver's "infeasible" that a known portfolio contradicts reported
//! as a solver error. The ratio family is solved only when its preconditions hold. The bands'
//! resamples, which re-solve the run's X on other scenarios, skip the feasibility LP and let a family
//! take an auxiliary optimum its own rule does not cut off ([`Premises::Shown`]); the run and the
//! backtest establish everything.

use super::lp::{Failure, Solved, Timing};
use super::{
    Emptiness, Family, Lps, Method, Outcome, Preconditions, Problem, Status, explain_empty,
    failure_words, outcome, preconditions, preconditions_without_portfolio, resolve_cap,
    resolve_floor, unless_contradicted,
};
use crate::config::{CapRule, FloorRule};
use crate::risk;
use crate::risk::RiskProfile;
use std::time::{Duration, Instant};

/// What the families aim at: the cap and floor rules, and the reference portfolio (the fund's current
/// holdings) that "times current" and "plus current" refer to.
#[derive(Debug, Clone, Copy)]
pub struct Targets<'a> {
    pub cap: CapRule,
    pub floor: FloorRule,
    /// The reference portfolio's profile on the problem's scenarios; it must hold the model confidence.
    pub current: Option<&'a RiskProfile>,
}

/// What is known of X before solving.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Premises {
    /// Nothing: show X non-empty and check the ratio's preconditions with the auxiliary LPs (a fund's run
    /// and every month of the backtest).
    Establish,
    /// X was shown non-empty by an earlier solve on the same feasible set (the run's, before the bands'
    /// resamples re-solve it on other scenarios; X does not depend on the scenarios): the feasibility LP
    /// is skipped. The auxiliary LPs still run (the cap, the floor and the ratio's preconditions depend on
    /// the scenarios), as does, with an active-CVaR budget, the LP deciding whether the budget leaves any
    /// portfolio. A family whose own rule does not bind at an auxiliary optimum takes that optimum instead
    /// of solving its own LP: min_cvar when the minimum-CVaR portfolio meets the floor, max_return when
    /// the maximum-return portfolio keeps within the cap (optimal over a larger set and feasible here).
    Shown,
    /// X is not empty and the ratio's preconditions hold by construction (the bench's synthetic problems):
    /// no feasibility or auxiliary LP is solved, so each family's own LP is all that runs.
    Given,
}

/// The two auxiliary LPs over X: minimum CVaR and maximum expected return (or why each has no optimum).
#[derive(Debug, Clone)]
pub struct Auxiliary {
    pub min_cvar: Result<f64, Failure>,
    pub max_return: Result<f64, Failure>,
    /// With [`Premises::Shown`], the two optima themselves (minimum CVaR, maximum return), for the
    /// families to take where their own rule does not bind.
    optima: [Option<Solved>; 2],
}

impl Auxiliary {
    /// Not solved, because X is empty, has no known portfolio, or the premises were given.
    fn unsolved() -> Auxiliary {
        let not = || {
            Err(Failure::Solver(
                "not solved: the feasible set has no known portfolio".into(),
            ))
        };
        Auxiliary {
            min_cvar: not(),
            max_return: not(),
            optima: [None, None],
        }
    }
}

/// One family's outcome with what its LP cost.
#[derive(Debug, Clone)]
pub struct FamilyOutcome {
    pub family: Family,
    pub outcome: Outcome,
    /// The solver's timing of the family's LP (`None` when no LP was solved or it ended without one).
    pub timing: Option<Timing>,
    /// Wall time of the family's step, LP or not.
    pub elapsed: Duration,
}

/// Everything [`solve_all`] established about one problem.
#[derive(Debug, Clone)]
pub struct Solution {
    pub emptiness: Emptiness,
    pub auxiliary: Auxiliary,
    pub preconditions: Preconditions,
    /// The resolved CVaR cap (NaN when its base is unknown).
    pub cap: f64,
    /// The resolved return floor.
    pub floor: f64,
    /// One entry per family, in the order of [`Family::ALL`].
    pub families: Vec<FamilyOutcome>,
}

impl Solution {
    /// The outcome of `family`.
    pub fn outcome(&self, family: Family) -> &Outcome {
        &self
            .families
            .iter()
            .find(|f| f.family == family)
            .expect("every family is solved")
            .outcome
    }
}

/// Solves every family on `p` with the method its size calls for ([`Problem::method`]).
pub fn solve_all(p: &Problem, targets: &Targets, premises: Premises) -> Solution {
    solve_all_by(p, targets, premises, p.method())
}

/// [`solve_all`] with an explicit method for every LP (the bench times both).
pub fn solve_all_by(
    p: &Problem,
    targets: &Targets,
    premises: Premises,
    method: Method,
) -> Solution {
    solve_all_on(&mut p.lps(method), targets, premises)
}

/// [`solve_all`] on the problem's LPs `lps` ([`Problem::lps`]): with cutting planes their cut model
/// stays loaded afterwards with every cut the families needed, for the caller's further LPs (the run's
/// frontier).
pub fn solve_all_on(lps: &mut Lps, targets: &Targets, premises: Premises) -> Solution {
    let p = lps.problem();
    let (emptiness, auxiliary) = screen(p, lps, premises);
    let preconditions = match (premises, &emptiness) {
        (Premises::Given, _) => Preconditions::given(),
        (Premises::Establish | Premises::Shown, Emptiness::NotEmpty) => preconditions(
            &auxiliary.min_cvar,
            &auxiliary.max_return,
            p.feasible.charges_costs(),
        ),
        (Premises::Establish | Premises::Shown, other) => preconditions_without_portfolio(other),
    };
    let c = p.confidence;
    let cap = resolve_cap(
        targets.cap,
        auxiliary.min_cvar.as_ref().ok().copied(),
        targets.current.map(|r| r.at(c).cvar),
    );
    let floor = resolve_floor(targets.floor, targets.current.map(|r| r.expected_return));
    let mut solution = Solution {
        emptiness,
        auxiliary,
        preconditions,
        cap,
        floor,
        families: Vec::with_capacity(Family::ALL.len()),
    };
    for family in Family::ALL {
        let start = Instant::now();
        let (outcome, timing) = solve_family(p, lps, family, &solution, targets);
        solution.families.push(FamilyOutcome {
            family,
            outcome,
            timing,
            elapsed: start.elapsed(),
        });
    }
    solution
}

/// Whether X is empty and, when it is not, the two auxiliary LPs over it.
fn screen(p: &Problem, lps: &mut Lps, premises: Premises) -> (Emptiness, Auxiliary) {
    if premises == Premises::Given {
        return (Emptiness::NotEmpty, Auxiliary::unsolved());
    }
    let shown = premises == Premises::Shown;
    let emptiness = if shown {
        Emptiness::NotEmpty
    } else {
        explain_empty(p.feasible, &p.set.assets, p.backend)
    };
    let emptiness = match emptiness {
        Emptiness::NotEmpty => within_active_budget(p, lps),
        other => other,
    };
    let auxiliary = match emptiness {
        Emptiness::NotEmpty => auxiliary(lps, shown),
        Emptiness::Empty(_) | Emptiness::Unknown(_) => Auxiliary::unsolved(),
    };
    (emptiness, auxiliary)
}

/// The two auxiliary LPs over X, their optima kept when `keep`.
fn auxiliary(lps: &mut Lps, keep: bool) -> Auxiliary {
    let min_cvar = lps.min_cvar(None);
    let max_return = lps.max_return(None);
    let kept = |r: &Result<Solved, Failure>| r.as_ref().ok().filter(|_| keep).cloned();
    Auxiliary {
        optima: [kept(&min_cvar), kept(&max_return)],
        min_cvar: min_cvar.map(|s| s.objective),
        max_return: max_return.map(|s| s.objective),
    }
}

/// The auxiliary optimum `which` (0 minimum CVaR, 1 maximum return) when it was kept and meets `meets`.
fn reusable(s: &Solution, which: usize, meets: impl FnOnce(&[f64]) -> bool) -> Option<Solved> {
    s.auxiliary.optima[which]
        .as_ref()
        .filter(|o| meets(&o.weights))
        .cloned()
}

/// Whether the active-CVaR budget leaves any portfolio of a non-empty X: the minimum active CVaR over X
/// against the budget. Empty only when that LP is solved and its minimum exceeds the budget by more than
/// the post-solve tolerance; an LP without an optimum leaves it unknown.
fn within_active_budget(p: &Problem, lps: &mut Lps) -> Emptiness {
    let Some(a) = p.active else {
        return Emptiness::NotEmpty;
    };
    match lps.min_active_cvar() {
        Ok(s) if s.objective <= a.budget + super::FEASIBILITY_TOLERANCE => Emptiness::NotEmpty,
        Ok(s) => Emptiness::Empty(format!(
            "policy.active_cvar_budget: the active-CVaR budget {:.6} is below the minimum active CVaR {:.6} against the policy benchmark that the bounds, group limits and turnover limit allow (weights summing to 1); raise the budget",
            a.budget, s.objective
        )),
        Err(f) => Emptiness::Unknown(format!(
            "the LP of the minimum active CVaR over the feasible set, which decides whether the active-CVaR budget policy.active_cvar_budget = {:.6} leaves any portfolio, ended without a verdict ({})",
            a.budget,
            failure_words(&f)
        )),
    }
}

/// How the diagnoses name the set the auxiliary LPs ran over: the feasible set, within the active-CVaR
/// budget when there is one.
fn over_set(p: &Problem) -> String {
    match p.active {
        Some(a) => format!(
            "the feasible set within the active-CVaR budget policy.active_cvar_budget = {:.6}",
            a.budget
        ),
        None => "the feasible set".into(),
    }
}

/// One family's outcome and its LP's timing.
type Step = (Outcome, Option<Timing>);

fn solve_family(
    p: &Problem,
    lps: &mut Lps,
    family: Family,
    s: &Solution,
    targets: &Targets,
) -> Step {
    match &s.emptiness {
        Emptiness::Empty(why) => (
            Outcome::failed(
                Status::Infeasible,
                format!("{}: the feasible set is empty: {why}", family.name()),
            ),
            None,
        ),
        Emptiness::Unknown(why) => (
            Outcome::failed(
                Status::SolverError,
                format!(
                    "{why}; whether any portfolio meets the limits is not established, so no model was solved"
                ),
            ),
            None,
        ),
        Emptiness::NotEmpty => match family {
            Family::MaxReturn => {
                let cap = s.cap;
                let within = |x: &[f64]| risk::cvar_of(p.set, x, p.confidence) <= cap;
                let solved = reusable(s, 1, within).map(Ok);
                max_return(p, lps, cap, targets.cap, &s.auxiliary.min_cvar, solved)
            }
            Family::MinCvar => {
                let floor = s.floor;
                let meets = |x: &[f64]| super::net_return(p, x) >= floor;
                let solved = reusable(s, 0, meets).map(Ok);
                min_cvar(p, lps, floor, &s.auxiliary.max_return, solved)
            }
            Family::MaxRatio => max_ratio(p, lps, &s.preconditions),
        },
    }
}

/// An LP's result as an outcome (see [`outcome`]) together with its timing.
fn judged(
    p: &Problem,
    r: Result<Solved, Failure>,
    cap: Option<f64>,
    floor: Option<f64>,
    diagnose: impl FnOnce() -> String,
) -> Step {
    let timing = r.as_ref().ok().map(|s| s.timing);
    (outcome(p, r, cap, floor, diagnose), timing)
}

/// max_return under the resolved cap (`solved`: the auxiliary optimum when it already keeps within the
/// cap, with [`Premises::Shown`]). A cap that could not be resolved (its base is unknown) is said so
/// rather than handed to the solver as NaN.
fn max_return(
    p: &Problem,
    lps: &mut Lps,
    cap: f64,
    rule: CapRule,
    min_x: &Result<f64, Failure>,
    solved: Option<Result<Solved, Failure>>,
) -> Step {
    if cap.is_nan() {
        return (unresolved_cap(rule, min_x), None);
    }
    let set = over_set(p);
    let (o, timing) = judged(
        p,
        solved.unwrap_or_else(|| lps.max_return(Some(cap))),
        Some(cap),
        None,
        || match min_x {
            Ok(m) if cap < *m => format!(
                "models.max_return.cvar_cap: the CVaR cap {cap:.6} is below the minimum attainable CVaR {m:.6} over {set}; raise the cap"
            ),
            Ok(_) => {
                format!("the solver reports the CVaR cap {cap:.6} infeasible together with {set}")
            }
            Err(f) => format!(
                "the solver reports the CVaR cap {cap:.6} infeasible together with {set}; the minimum CVaR over {set} is not known ({}), so whether the cap is below it is not established",
                failure_words(f)
            ),
        },
    );
    let witness = min_x.as_ref().ok().filter(|m| cap >= **m).map(|m| {
        format!("the minimum-CVaR portfolio of the feasible set has CVaR {m:.6} ≤ the cap {cap:.6}")
    });
    (unless_contradicted(o, witness), timing)
}

/// Why a cap rule has no value: its base (the minimum CVaR over X or the current CVaR) is not known.
fn unresolved_cap(rule: CapRule, min_x: &Result<f64, Failure>) -> Outcome {
    let base = match (rule, min_x) {
        (CapRule::TimesMin(_), Err(f)) => format!(
            "it is a multiple of the minimum CVaR over the feasible set, and that LP ended without an optimum ({})",
            failure_words(f)
        ),
        _ => "its base (the minimum CVaR over the feasible set or the current portfolio's CVaR) is not known".into(),
    };
    Outcome::failed(
        Status::SolverError,
        format!(
            "models.max_return.cvar_cap could not be resolved: {base}; the model was not solved"
        ),
    )
}

/// min_cvar above the resolved return floor, diagnosed against the maximum expected return over X.
/// `solved` is the auxiliary optimum when it already meets the floor (with [`Premises::Shown`]).
fn min_cvar(
    p: &Problem,
    lps: &mut Lps,
    floor: f64,
    max_x: &Result<f64, Failure>,
    solved: Option<Result<Solved, Failure>>,
) -> Step {
    let ret = super::return_words(p.feasible.charges_costs());
    let set = over_set(p);
    let (o, timing) = judged(
        p,
        solved.unwrap_or_else(|| lps.min_cvar(Some(floor))),
        None,
        Some(floor),
        || match max_x {
            Ok(m) if floor > *m => format!(
                "models.min_cvar.return_floor: the return floor {floor:.6} is above the best attainable {ret} {m:.6} over {set}; lower the floor"
            ),
            Ok(_) => format!(
                "the solver reports the return floor {floor:.6} infeasible together with {set}"
            ),
            Err(f) => format!(
                "the solver reports the return floor {floor:.6} infeasible together with {set}; the best attainable {ret} is not known ({}), so whether the floor is above it is not established",
                failure_words(f)
            ),
        },
    );
    let witness = max_x.as_ref().ok().filter(|m| floor <= **m).map(|m| {
        format!("the maximum-return portfolio of the feasible set has {ret} {m:.6} ≥ the floor {floor:.6}")
    });
    (unless_contradicted(o, witness), timing)
}

/// max_ratio: not applicable when a precondition is shown to fail, a solver error when the preconditions
/// could not be established, else the Charnes–Cooper LP — whose set is never empty when they hold.
fn max_ratio(p: &Problem, lps: &mut Lps, pre: &Preconditions) -> Step {
    if !pre.holds {
        let status = if pre.established {
            Status::NotApplicable
        } else {
            Status::SolverError
        };
        return (
            Outcome::failed(status, pre.reason.clone().unwrap_or_default()),
            None,
        );
    }
    let (o, timing) = judged(p, lps.max_ratio(), None, None, String::new);
    let o = unless_contradicted(
        o,
        Some("the feasible set is not empty and CVaR > 0 on it, so any of its portfolios scaled by t = 1/CVaR satisfies the scaled LP".into()),
    );
    (o, timing)
}
