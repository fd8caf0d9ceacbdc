//! Faults outside the input files: a solver that returns no optimum, and an output folder that cannot be
//! written (the latter is in the bad-input corpus, `output_*` cases, run by `bad_inputs`).
//!
//! A solver failure is provoked cheaply by handing the library a feasible set with no bounds on the
//! weights: with short positions unbounded, maximising μ·x under the budget Σx = 1 alone has no optimum
//! whenever two assets' expected returns differ (go long the better, short the worse, without limit).
//! HiGHS says so; Clarabel, through good_lp, returns its certificate of unboundedness as if it were a
//! solution, which the post-solve check (`models::outcome`) must refuse rather than report as optimal.

use tailpack::config::Backend;
use tailpack::models::{self, FeasibleSet, Problem, Status};
use tailpack::scenarios::ScenarioSet;

fn unbounded_problem_outcome(backend: Backend) -> models::Outcome {
    // Two assets, three scenarios; means 0.02 and 0.00 differ, so the LP is unbounded.
    let set = ScenarioSet::from_matrix(
        vec!["AS01".into(), "AS02".into()],
        vec![0.03, 0.01, 0.02, -0.01, 0.01, 0.0],
        vec![1.0 / 3.0; 3],
    )
    .unwrap();
    let fs = FeasibleSet {
        lower: vec![f64::NEG_INFINITY; 2],
        upper: vec![f64::INFINITY; 2],
        groups: vec![],
        turnover_max: None,
        current: None,
        cost_rates: vec![],
    };
    let p = Problem {
        set: &set,
        mu: set.mean(),
        confidence: 0.9,
        feasible: &fs,
        backend,
        active: None,
    };
    models::outcome(&p, p.max_return(None), None, None, || "infeasible".into())
}

#[test]
fn a_solver_without_an_optimum_is_reported_as_solver_error_with_its_words() {
    for backend in [Backend::Highs, Backend::Clarabel] {
        let o = unbounded_problem_outcome(backend);
        assert_eq!(
            o.status,
            Status::SolverError,
            "{backend:?}: {:?}",
            o.message
        );
        let msg = o.message.unwrap_or_default();
        assert!(
            msg.contains("unbounded"),
            "{backend:?}: the message must say what went wrong: {msg}"
        );
        assert!(
            o.weights.is_none(),
            "{backend:?}: no portfolio is reported without an optimum"
        );
    }
}
