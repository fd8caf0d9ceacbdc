//! The three model families against an independent general-purpose LP solver (scipy's HiGHS `linprog`,
//! with Dinkelbach's method for the ratio), a brute-force grid, a hand-worked case, and the two backends.

use super::common::{normal, repo};
use rand::{RngExt, SeedableRng};
use serde_json::{Value, json};
use tailpack::config::Backend;
use tailpack::models::{self, ActiveBudget, FeasibleSet, Group, Method, Problem};
use tailpack::risk::{active_cvar_of, cvar_of};
use tailpack::scenarios::ScenarioSet;

/// Builds a feasible set X for a test: starts long-only (every weight in [0, 1], budget Σx = 1, no group,
/// no turnover limit) and changes one part per call.
pub(crate) struct Limits(FeasibleSet);

impl Limits {
    /// `n` assets, long-only.
    pub(crate) fn long_only(n: usize) -> Limits {
        Limits(FeasibleSet {
            lower: vec![0.0; n],
            upper: vec![1.0; n],
            groups: vec![],
            turnover_max: None,
            current: None,
            cost_rates: vec![],
        })
    }

    pub(crate) fn lower(mut self, lower: Vec<f64>) -> Limits {
        self.0.lower = lower;
        self
    }

    pub(crate) fn upper(mut self, upper: Vec<f64>) -> Limits {
        self.0.upper = upper;
        self
    }

    /// A group limit min ≤ Σ_{i ∈ members} x_i ≤ max.
    pub(crate) fn group(mut self, name: &str, members: &[usize], min: f64, max: f64) -> Limits {
        self.0.groups.push(Group {
            name: name.into(),
            members: members.to_vec(),
            min,
            max,
        });
        self
    }

    /// Current holdings, and a turnover limit Σ|x − current| ≤ max around them when given.
    pub(crate) fn current(mut self, current: Vec<f64>, turnover_max: Option<f64>) -> Limits {
        self.0.current = Some(current);
        self.0.turnover_max = turnover_max;
        self
    }

    pub(crate) fn build(self) -> FeasibleSet {
        self.0
    }
}

/// The problem of `set` on X at confidence `c`, solved with HiGHS (`Problem { backend, ..problem(…) }`
/// for the other backend).
pub(crate) fn problem<'a>(set: &'a ScenarioSet, fs: &'a FeasibleSet, c: f64) -> Problem<'a> {
    Problem {
        set,
        mu: set.mean(),
        confidence: c,
        feasible: fs,
        backend: Backend::Highs,
        active: None,
    }
}

/// A random instance: scenarios, feasible set, confidence, cap and floor, and optionally a benchmark's
/// scenario returns with an active-CVaR budget.
struct Instance {
    set: ScenarioSet,
    fs: FeasibleSet,
    c: f64,
    cap: f64,
    floor: f64,
    active: Option<(Vec<f64>, f64)>,
}

fn instance(seed: u64) -> Instance {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let n = 4 + (seed as usize % 5);
    let s = 150 + 50 * (seed as usize % 4);
    let mut returns = Vec::with_capacity(n * s);
    for _ in 0..s {
        let f = normal(&mut rng) * if rng.random::<f64>() < 0.1 { 3.0 } else { 1.0 };
        for i in 0..n {
            let beta = 0.2 + 0.15 * i as f64;
            returns.push(0.002 + 0.001 * i as f64 + 0.02 * beta * f + 0.01 * normal(&mut rng));
        }
    }
    let probs = if seed % 2 == 0 {
        vec![1.0 / s as f64; s]
    } else {
        tailpack::scenarios::decayed((0..s).rev().map(|a| a as f64), 60.0)
    };
    let set = ScenarioSet::from_matrix((0..n).map(|i| format!("A{i}")).collect(), returns, probs)
        .unwrap();
    let upper: Vec<f64> = (0..n).map(|i| if i % 3 == 0 { 0.3 } else { 0.6 }).collect();
    let mut lower = vec![0.0; n];
    lower[0] = 0.05;
    let turnover = (seed % 3 != 0).then_some(0.4 + 0.1 * (seed % 4) as f64);
    let fs = Limits::long_only(n)
        .lower(lower)
        .upper(upper)
        .group("g", &[n - 1, n - 2], 0.1, 0.5)
        .current(vec![1.0 / n as f64; n], turnover)
        .build();
    let c = [0.9, 0.95, 0.975][seed as usize % 3];
    let p = problem(&set, &fs, c);
    let min_cvar = p.min_cvar(None).unwrap().objective;
    let max_ret = p.max_return(None).unwrap().objective;
    let min_ret = p
        .min_cvar(None)
        .map(|s| models::dot(&p.mu, &s.weights))
        .unwrap();
    Instance {
        cap: min_cvar * 1.3,
        floor: min_ret + 0.5 * (max_ret - min_ret),
        set,
        fs,
        c,
        active: None,
    }
}

impl Instance {
    fn problem(&self) -> Problem<'_> {
        Problem {
            active: self.active.as_ref().map(|(b, budget)| ActiveBudget {
                benchmark: b,
                budget: *budget,
            }),
            ..problem(&self.set, &self.fs, self.c)
        }
    }
}

fn to_json(i: &Instance) -> Value {
    let rows: Vec<Vec<f64>> = (0..i.set.len()).map(|k| i.set.row(k).to_vec()).collect();
    json!({
        "confidence": i.c, "probabilities": i.set.probabilities, "returns": rows,
        "lower": i.fs.lower, "upper": i.fs.upper,
        "groups": i.fs.groups.iter().map(|g| json!({"members": g.members, "min": g.min, "max": g.max})).collect::<Vec<_>>(),
        "turnover_max": i.fs.turnover_max, "current": if i.fs.turnover_max.is_some() || i.fs.charges_costs() { json!(i.fs.current) } else { Value::Null },
        "cost_rates": if i.fs.charges_costs() { json!(i.fs.cost_rates) } else { Value::Null },
        "cvar_cap": i.cap, "return_floor": i.floor,
        "benchmark": i.active.as_ref().map(|a| &a.0), "active_cvar_budget": i.active.as_ref().map(|a| a.1),
    })
}

/// Runs `tests/reference/cvar_reference.py` (scipy.optimize.linprog, method "highs").
fn reference(i: &Instance) -> Value {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("instance.json");
    std::fs::write(&input, to_json(i).to_string()).unwrap();
    let script = repo().join("tests/reference/cvar_reference.py");
    let out = std::process::Command::new("python3")
        .arg(&script)
        .arg(&input)
        .output()
        .expect("python3 must be installed (see README prerequisites)");
    assert!(
        out.status.success(),
        "reference solver failed (is scipy installed? `python3 -m pip install -r tests/reference/requirements.txt`): {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn close(a: f64, b: f64, tol: f64, what: &str) {
    assert!(
        (a - b).abs() <= tol * (1.0 + b.abs()),
        "{what}: tailpack {a} vs reference {b}"
    );
}

#[test]
fn optima_match_scipy_highs_on_random_instances() {
    for seed in 0..8u64 {
        let i = instance(seed);
        let r = reference(&i);
        let p = i.problem();
        let mr = p.max_return(Some(i.cap)).unwrap();
        assert_eq!(r["max_return"]["status"], "optimal");
        close(
            mr.objective,
            r["max_return"]["objective"].as_f64().unwrap(),
            1e-7,
            &format!("seed {seed} max_return"),
        );
        let mc = p.min_cvar(Some(i.floor)).unwrap();
        close(
            mc.objective,
            r["min_cvar"]["objective"].as_f64().unwrap(),
            1e-7,
            &format!("seed {seed} min_cvar"),
        );
        let ratio = p.max_ratio().unwrap();
        let got = models::dot(&p.mu, &ratio.weights) / cvar_of(&i.set, &ratio.weights, i.c);
        close(
            got,
            r["max_ratio"]["objective"].as_f64().unwrap(),
            1e-6,
            &format!("seed {seed} max_ratio (Dinkelbach reference)"),
        );
        close(
            ratio.objective,
            got,
            1e-7,
            &format!("seed {seed} Charnes–Cooper objective equals the ratio"),
        );
        close(
            p.min_cvar(None).unwrap().objective,
            r["min_cvar_over_x"]["objective"].as_f64().unwrap(),
            1e-7,
            "min CVaR over X",
        );
        // Every reported optimum satisfies its constraints (checked in code too, see models::verify).
        assert!(models::verify(&p, &mr.weights, Some(i.cap), None) < 1e-7);
        assert!(models::verify(&p, &mc.weights, None, Some(i.floor)) < 1e-7);
        assert!(models::verify(&p, &ratio.weights, None, None) < 1e-7);
    }
}

/// `instance(seed)` with one-way cost rates of 10–100 bp per asset (about the size of a month's expected
/// return, so they move the optima), the cap and floor set again on the net basis.
fn costed(seed: u64) -> Instance {
    let mut i = instance(seed);
    let n = i.set.width();
    let mut rng = rand::rngs::StdRng::seed_from_u64(1000 + seed);
    i.fs.cost_rates = (0..n)
        .map(|_| 0.001 + 0.009 * rng.random::<f64>())
        .collect();
    with_cap_and_floor(i)
}

/// The instance with a CVaR cap 1.3 × its least CVaR and a return floor halfway between the net return of
/// the least-CVaR portfolio and the largest net return, so both bind somewhere inside the feasible set.
fn with_cap_and_floor(mut i: Instance) -> Instance {
    let p = i.problem();
    let min_cvar = p.min_cvar(None).unwrap();
    let max_net = p.max_return(None).unwrap().objective;
    let min_net = models::net_return(&p, &min_cvar.weights);
    i.cap = min_cvar.objective * 1.3;
    i.floor = min_net + 0.5 * (max_net - min_net);
    i
}

/// Issue 16: the models net of transaction costs against scipy's HiGHS `linprog`
/// (`tests/reference/cvar_reference.py`, which writes the costs through its own turnover columns, and takes
/// the ratio by Dinkelbach's method, not Charnes–Cooper), on random instances with cost rates, bounds, a
/// group and (for two seeds in three) a turnover limit.
#[test]
fn cost_aware_optima_match_scipy_highs_on_random_instances() {
    for seed in 0..8u64 {
        let i = costed(seed);
        let r = reference(&i);
        let p = i.problem();
        let what = |m: &str| format!("seed {seed} {m} net of costs");
        let mr = p.max_return(Some(i.cap)).unwrap();
        assert_eq!(r["max_return"]["status"], "optimal");
        close(
            mr.objective,
            r["max_return"]["objective"].as_f64().unwrap(),
            1e-7,
            &what("max_return"),
        );
        // The LP's objective is the portfolio's own net return, recomputed from its weights.
        close(
            mr.objective,
            models::net_return(&p, &mr.weights),
            1e-9,
            &what("max_return objective"),
        );
        let mc = p.min_cvar(Some(i.floor)).unwrap();
        close(
            mc.objective,
            r["min_cvar"]["objective"].as_f64().unwrap(),
            1e-7,
            &what("min_cvar"),
        );
        assert!(
            models::net_return(&p, &mc.weights) >= i.floor - 1e-8,
            "{}",
            what("floor on the net return")
        );
        let ratio = p.max_ratio().unwrap();
        let got = models::net_return(&p, &ratio.weights) / cvar_of(&i.set, &ratio.weights, i.c);
        close(
            got,
            r["max_ratio"]["objective"].as_f64().unwrap(),
            1e-6,
            &what("max_ratio (Dinkelbach reference)"),
        );
        close(
            ratio.objective,
            got,
            1e-7,
            &what("Charnes–Cooper objective equals the net ratio"),
        );
        close(
            p.max_return(None).unwrap().objective,
            r["max_return_over_x"]["objective"].as_f64().unwrap(),
            1e-7,
            &what("max net return over X (ratio precondition)"),
        );
        // The reference's cost of its own portfolio is Σ rate·|x − current| (its `cost` field).
        let x: Vec<f64> = serde_json::from_value(r["max_return"]["weights"].clone()).unwrap();
        close(
            models::cost(&i.fs, &x),
            r["max_return"]["cost"].as_f64().unwrap(),
            1e-12,
            &what("cost of a portfolio"),
        );
        assert!(models::verify(&p, &mr.weights, Some(i.cap), None) < 1e-7);
        assert!(models::verify(&p, &mc.weights, None, Some(i.floor)) < 1e-7);
        assert!(models::verify(&p, &ratio.weights, None, None) < 1e-7);
    }
}

/// The costs change the answer: on a costed instance, the max-return optimum gross of costs (scipy on the
/// same instance without rates) earns less net than the net optimum, unless both are the same portfolio.
#[test]
fn the_net_optimum_beats_the_gross_optimum_net_of_costs() {
    let i = costed(1);
    let p = i.problem();
    let gross_fs = FeasibleSet {
        cost_rates: vec![],
        ..i.fs.clone()
    };
    let gross = problem(&i.set, &gross_fs, i.c)
        .max_return(Some(i.cap))
        .unwrap();
    let net = p.max_return(Some(i.cap)).unwrap();
    assert!(models::net_return(&p, &net.weights) >= models::net_return(&p, &gross.weights) - 1e-10);
    assert!(
        models::turnover(&net.weights, i.fs.current.as_ref().unwrap())
            < models::turnover(&gross.weights, i.fs.current.as_ref().unwrap()) - 1e-6,
        "costs of 10–100 bp must make the max-return portfolio trade less"
    );
}

/// Issue 16: raising the cost rate lowers turnover. With one rate ρ for every asset the cost is ρ·T(x), and for
/// ρ₁ < ρ₂ with optima x₁, x₂ of μ·x − ρ·T(x) over the same set, optimality of each gives
/// (ρ₂ − ρ₁)(T(x₁) − T(x₂)) ≥ 0: turnover cannot rise with the rate. At a rate far above any expected return
/// the fund stays where it is (the current holdings are in X and within the cap), so turnover falls to 0.
#[test]
fn raising_costs_lowers_turnover() {
    let i = instance(3); // no turnover limit for seed 3
    assert!(i.fs.turnover_max.is_none());
    let current = i.fs.current.clone().unwrap();
    let cap = i.cap.max(cvar_of(&i.set, &current, i.c));
    let mut last = f64::INFINITY;
    let mut first = None;
    for rate in [0.0, 0.0005, 0.001, 0.002, 0.004, 0.008, 0.016, 0.5] {
        let fs = FeasibleSet {
            cost_rates: vec![rate; i.set.width()],
            ..i.fs.clone()
        };
        let p = problem(&i.set, &fs, i.c);
        let x = p.max_return(Some(cap)).unwrap().weights;
        let t = models::turnover(&x, &current);
        assert!(
            t <= last + 1e-8,
            "rate {rate}: turnover {t} above {last} at a lower rate"
        );
        first.get_or_insert(t);
        last = t;
    }
    assert!(first.unwrap() > 0.1, "without costs the optimum trades");
    assert!(
        last < 1e-8,
        "at 50% a trade the fund stays put, turnover {last}"
    );
}

#[test]
fn infeasible_cap_and_floor_agree_with_scipy() {
    let mut i = instance(3);
    let p = i.problem();
    let min_cvar = p.min_cvar(None).unwrap().objective;
    let max_ret = p.max_return(None).unwrap().objective;
    i.cap = 0.5 * min_cvar;
    i.floor = max_ret + 0.01;
    let r = reference(&i);
    let p = i.problem();
    assert!(p.max_return(Some(i.cap)).is_err());
    assert!(p.min_cvar(Some(i.floor)).is_err());
    assert_eq!(r["max_return"]["status"], "infeasible");
    assert_eq!(r["min_cvar"]["status"], "infeasible");
}

fn simplex_grid(step: f64) -> Vec<[f64; 3]> {
    let m = (1.0 / step).round() as usize;
    let mut pts = vec![];
    for a in 0..=m {
        for b in 0..=(m - a) {
            pts.push([a as f64 * step, b as f64 * step, (m - a - b) as f64 * step]);
        }
    }
    pts
}

#[test]
fn three_assets_beat_or_match_every_grid_point() {
    // Brute force: every point of a step-0.005 grid over the 3-asset simplex (20,301 portfolios), its CVaR by
    // sorting. Each LP optimum must be at least as good as every feasible grid point, and the best grid point
    // must come close to it (the grid's resolution bounds the gap).
    let mut rng = rand::rngs::StdRng::seed_from_u64(99);
    let s = 120;
    let returns: Vec<f64> = (0..s * 3)
        .map(|j| 0.004 * (j % 3) as f64 + 0.02 * (1.0 + (j % 3) as f64) * normal(&mut rng))
        .collect();
    let set = ScenarioSet::from_matrix(
        vec!["A".into(), "B".into(), "C".into()],
        returns,
        vec![1.0 / s as f64; s],
    )
    .unwrap();
    let fs = Limits::long_only(3).build();
    let c = 0.9;
    let p = problem(&set, &fs, c);
    let grid: Vec<([f64; 3], f64, f64)> = simplex_grid(0.005)
        .into_iter()
        .map(|x| (x, models::dot(&p.mu, &x), cvar_of(&set, &x, c)))
        .collect();
    let min_cvar = p.min_cvar(None).unwrap().objective;
    let cap = min_cvar * 1.5;
    let lp = p.max_return(Some(cap)).unwrap().objective;
    let best = grid
        .iter()
        .filter(|g| g.2 <= cap)
        .map(|g| g.1)
        .fold(f64::NEG_INFINITY, f64::max);
    assert!(
        lp >= best - 1e-12 && lp - best < 2e-4,
        "max_return LP {lp} vs grid {best}"
    );
    let grid_min = grid.iter().map(|g| g.2).fold(f64::INFINITY, f64::min);
    assert!(
        min_cvar <= grid_min + 1e-12 && grid_min - min_cvar < 2e-4,
        "min_cvar LP {min_cvar} vs grid {grid_min}"
    );
    let ratio = p.max_ratio().unwrap();
    let lp_ratio = models::dot(&p.mu, &ratio.weights) / cvar_of(&set, &ratio.weights, c);
    let grid_ratio = grid
        .iter()
        .filter(|g| g.2 > 0.0)
        .map(|g| g.1 / g.2)
        .fold(f64::NEG_INFINITY, f64::max);
    assert!(
        lp_ratio >= grid_ratio - 1e-9 && (lp_ratio - grid_ratio) / lp_ratio < 0.01,
        "max_ratio LP {lp_ratio} vs grid {grid_ratio}"
    );
}

#[test]
fn max_ratio_dominates_a_fifty_point_min_cvar_frontier_and_backends_agree() {
    let i = instance(5);
    let p = i.problem();
    let ratio = p.max_ratio().unwrap().objective;
    let lo = models::dot(&p.mu, &p.min_cvar(None).unwrap().weights);
    let hi = p.max_return(None).unwrap().objective;
    for k in 0..50 {
        let floor = lo + (hi - lo) * k as f64 / 49.0;
        let s = p.min_cvar(Some(floor)).unwrap();
        let point = models::dot(&p.mu, &s.weights) / s.objective;
        assert!(
            ratio >= point - 1e-9,
            "frontier point {k}: ratio {point} above max_ratio {ratio}"
        );
    }
    // Simplex (HiGHS) and interior point (Clarabel) agree to 1e-6 on every model.
    let q = Problem {
        backend: Backend::Clarabel,
        ..i.problem()
    };
    close(
        q.max_ratio().unwrap().objective,
        ratio,
        1e-6,
        "max_ratio clarabel vs highs",
    );
    close(
        q.max_return(Some(i.cap)).unwrap().objective,
        p.max_return(Some(i.cap)).unwrap().objective,
        1e-6,
        "max_return backends",
    );
    close(
        q.min_cvar(Some(i.floor)).unwrap().objective,
        p.min_cvar(Some(i.floor)).unwrap().objective,
        1e-6,
        "min_cvar backends",
    );
}

#[test]
fn hand_worked_models_on_five_scenarios() {
    // The instance of tests/reference/selftest.py, worked by hand there: p = 0.2, c = 0.6, every asset loses in
    // s1, s2 and gains in s3..s5, so on long-only X, CVaR(x) = 0.01a + 0.02b + 0.06c and μ·x = 0.008a + 0.02b
    // + 0.03c; bounds (1, 0.5, 1), group {B, C} ≤ 0.8. Vertices: (1,0,0) ratio 0.8; (0.2,0,0.8) ratio 0.512;
    // (0.5,0.5,0) ratio 14/15; (0.2,0.5,0.3) ratio 0.6867. Hence max_ratio = 14/15 at (0.5, 0.5, 0);
    // max_return with cap 0.02 = 0.0162 at (0.4, 0.5, 0.1); min_cvar with floor 0.0184 = 0.025 at (0.3, 0.5, 0.2).
    let returns = vec![
        -0.01, -0.03, -0.08, -0.01, -0.01, -0.04, 0.01, 0.03, 0.06, 0.02, 0.04, 0.08, 0.03, 0.07,
        0.13,
    ];
    let set = ScenarioSet::from_matrix(
        vec!["A".into(), "B".into(), "C".into()],
        returns,
        vec![0.2; 5],
    )
    .unwrap();
    let fs = Limits::long_only(3)
        .upper(vec![1.0, 0.5, 1.0])
        .group("BC", &[1, 2], 0.0, 0.8)
        .build();
    for backend in [Backend::Highs, Backend::Clarabel] {
        let p = Problem {
            backend,
            ..problem(&set, &fs, 0.6)
        };
        let tol = if backend == Backend::Highs {
            1e-10
        } else {
            1e-6
        };
        let r = p.max_ratio().unwrap();
        assert!(
            (r.objective - 14.0 / 15.0).abs() < tol,
            "{backend:?} ratio {}",
            r.objective
        );
        for (w, e) in r.weights.iter().zip([0.5, 0.5, 0.0]) {
            assert!((w - e).abs() < tol * 10.0);
        }
        let m = p.max_return(Some(0.02)).unwrap();
        assert!((m.objective - 0.0162).abs() < tol);
        for (w, e) in m.weights.iter().zip([0.4, 0.5, 0.1]) {
            assert!((w - e).abs() < tol * 10.0);
        }
        let v = p.min_cvar(Some(0.0184)).unwrap();
        assert!((v.objective - 0.025).abs() < tol);
        for (w, e) in v.weights.iter().zip([0.3, 0.5, 0.2]) {
            assert!((w - e).abs() < tol * 10.0);
        }
    }
}

/// The hand-worked case of `tests/reference/selftest.py` (`test_hand_active_budget`) with the benchmark
/// = asset A and an active-CVaR budget of 0.004: on long-only X the active CVaR at 0.6 is 0.01 b + 0.05 c
/// (the worked derivation is there), which cuts X to the triangle (a, b, c) = (1, 0, 0), (0.6, 0.4, 0),
/// (0.92, 0, 0.08). Hence max_return (cap 0.02 slack) = 0.0128 and max_ratio = 32/35, both at
/// (0.6, 0.4, 0); min_cvar with floor 0.0112 = 0.038/3 at (2.2/3, 0.8/3, 0); the least active CVaR is 0
/// at A alone. On both backends and both methods.
#[test]
fn hand_worked_models_with_an_active_budget_on_five_scenarios() {
    let returns = vec![
        -0.01, -0.03, -0.08, -0.01, -0.01, -0.04, 0.01, 0.03, 0.06, 0.02, 0.04, 0.08, 0.03, 0.07,
        0.13,
    ];
    let benchmark: Vec<f64> = returns.iter().step_by(3).copied().collect();
    let set = ScenarioSet::from_matrix(
        vec!["A".into(), "B".into(), "C".into()],
        returns,
        vec![0.2; 5],
    )
    .unwrap();
    let fs = Limits::long_only(3)
        .upper(vec![1.0, 0.5, 1.0])
        .group("BC", &[1, 2], 0.0, 0.8)
        .build();
    let near = |got: &[f64], want: [f64; 3], tol: f64, what: &str| {
        for (g, w) in got.iter().zip(want) {
            assert!((g - w).abs() < tol, "{what}: {got:?} vs {want:?}");
        }
    };
    for backend in [Backend::Highs, Backend::Clarabel] {
        for method in [Method::Direct, Method::Cuts] {
            let p = Problem {
                backend,
                active: Some(ActiveBudget {
                    benchmark: &benchmark,
                    budget: 0.004,
                }),
                ..problem(&set, &fs, 0.6)
            };
            let tol = if backend == Backend::Highs {
                1e-10
            } else {
                1e-6
            };
            let what = |m: &str| format!("{backend:?} {method:?} {m}");
            let m = p.max_return_by(Some(0.02), method).unwrap();
            assert!((m.objective - 0.0128).abs() < tol, "{}", what("max_return"));
            near(&m.weights, [0.6, 0.4, 0.0], tol * 10.0, &what("max_return"));
            let r = p.max_ratio_by(method).unwrap();
            assert!(
                (r.objective - 32.0 / 35.0).abs() < tol,
                "{}: {}",
                what("ratio"),
                r.objective
            );
            near(&r.weights, [0.6, 0.4, 0.0], tol * 10.0, &what("max_ratio"));
            let v = p.min_cvar_by(Some(0.0112), method).unwrap();
            assert!(
                (v.objective - 0.038 / 3.0).abs() < tol,
                "{}",
                what("min_cvar")
            );
            near(
                &v.weights,
                [2.2 / 3.0, 0.8 / 3.0, 0.0],
                tol * 10.0,
                &what("min_cvar"),
            );
            let a = p.min_active_cvar_by(method).unwrap();
            assert!(a.objective.abs() < tol, "{}", what("least active CVaR"));
            near(
                &a.weights,
                [1.0, 0.0, 0.0],
                tol * 10.0,
                &what("least active CVaR"),
            );
        }
    }
}

#[test]
fn preconditions_reject_riskless_and_all_losing_universes() {
    // A riskless asset (return 0.001 in every scenario) allowed at 100%: min CVaR over X = −0.001 ≤ 0.
    let mut rng = rand::rngs::StdRng::seed_from_u64(5);
    let s = 100;
    let returns: Vec<f64> = (0..s)
        .flat_map(|_| [0.001, 0.01 + 0.05 * normal(&mut rng)])
        .collect();
    let set = ScenarioSet::from_matrix(
        vec!["CASH".into(), "RISK".into()],
        returns,
        vec![1.0 / s as f64; s],
    )
    .unwrap();
    let fs = Limits::long_only(2).build();
    let p = problem(&set, &fs, 0.95);
    let pre = models::preconditions(
        &p.min_cvar(None).map(|s| s.objective),
        &p.max_return(None).map(|s| s.objective),
        false,
    );
    assert!(!pre.holds);
    assert!(pre.reason.unwrap().contains("minimum CVaR"));
    // Every asset loses in every scenario: max expected return over X < 0.
    let returns: Vec<f64> = (0..s)
        .flat_map(|_| {
            [
                -0.01 - 0.01 * rng.random::<f64>(),
                -0.02 * rng.random::<f64>() - 0.001,
            ]
        })
        .collect();
    let set = ScenarioSet::from_matrix(
        vec!["A".into(), "B".into()],
        returns,
        vec![1.0 / s as f64; s],
    )
    .unwrap();
    let p = problem(&set, &fs, 0.95);
    let pre = models::preconditions(
        &p.min_cvar(None).map(|s| s.objective),
        &p.max_return(None).map(|s| s.objective),
        false,
    );
    assert!(!pre.holds);
    assert!(pre.reason.unwrap().contains("maximum expected return over"));
    // Net of costs, the reason names the net return the models maximise.
    let net = models::preconditions(
        &p.min_cvar(None).map(|s| s.objective),
        &p.max_return(None).map(|s| s.objective),
        true,
    );
    assert!(
        net.reason
            .unwrap()
            .contains("maximum expected return net of transaction costs over")
    );
}

#[test]
fn cutting_planes_reach_the_direct_lp_optimum() {
    // Künzi-Bay & Mayer (2006) cutting planes must converge to the optimum of the direct Rockafellar–Uryasev
    // LP (same feasible set, same scenarios) to 1e-7 relative, for all three models.
    use tailpack::models::Method;
    for seed in [2u64, 7] {
        let i = instance(seed);
        let p = i.problem();
        let pairs = [
            (
                p.max_return_by(Some(i.cap), Method::Direct)
                    .unwrap()
                    .objective,
                p.max_return_by(Some(i.cap), Method::Cuts)
                    .unwrap()
                    .objective,
            ),
            (
                p.min_cvar_by(Some(i.floor), Method::Direct)
                    .unwrap()
                    .objective,
                p.min_cvar_by(Some(i.floor), Method::Cuts)
                    .unwrap()
                    .objective,
            ),
            (
                p.max_ratio_by(Method::Direct).unwrap().objective,
                p.max_ratio_by(Method::Cuts).unwrap().objective,
            ),
        ];
        for (k, (direct, cuts)) in pairs.iter().enumerate() {
            assert!(
                (direct - cuts).abs() <= 1e-7 * direct.abs().max(1e-12),
                "seed {seed} model {k}: direct {direct} vs cuts {cuts}"
            );
        }
        let w = p.max_ratio_by(Method::Cuts).unwrap().weights;
        assert!(models::verify(&p, &w, None, None) < 1e-7);
    }
}

/// Issue 20: the ratio's cutting-plane solve (Dinkelbach's parametric LPs on one cut model, with λ moved in
/// rounds that still cut) reaches the optimum of the direct Charnes–Cooper LP (Charnes & Cooper 1962 on the
/// Rockafellar–Uryasev rows, one LP solved whole) to 1e-9 relative, on random instances: synthetic bench
/// problems of several shapes (more scenarios than assets and the reverse), and the random instances with
/// cost rates and with a binding active-CVaR budget. The ratio of the weights it returns, recomputed here
/// by sorting the losses, is the objective it reports.
#[test]
fn the_ratio_cut_loop_reaches_the_direct_charnes_cooper_optimum() {
    let synthetic: Vec<_> = [(30, 400, 1u64), (80, 600, 2), (120, 300, 3), (300, 250, 4)]
        .iter()
        .map(|&(n, s, seed)| tailpack::bench::synthetic(n, s, seed))
        .collect();
    let instances: Vec<Instance> = (0..4).map(costed).chain((0..4).map(budgeted)).collect();
    let mut problems: Vec<(String, Problem)> = synthetic
        .iter()
        .map(|sy| {
            (
                format!("synthetic {}x{}", sy.set.width(), sy.set.len()),
                sy.problem(),
            )
        })
        .collect();
    problems.extend(
        instances
            .iter()
            .enumerate()
            .map(|(k, i)| (format!("random instance {k}"), i.problem())),
    );
    for (what, p) in &problems {
        let direct = p.max_ratio_by(Method::Direct).unwrap().objective;
        let cuts = p.max_ratio_by(Method::Cuts).unwrap();
        let rel = |a: f64, b: f64| (a - b).abs() / b.abs();
        assert!(
            rel(cuts.objective, direct) <= 1e-9,
            "{what}: cuts {} vs direct {direct}",
            cuts.objective
        );
        let own =
            models::net_return(p, &cuts.weights) / cvar_of(p.set, &cuts.weights, p.confidence);
        assert!(
            rel(own, cuts.objective) <= 1e-12,
            "{what}: ratio of the weights {own} vs reported {}",
            cuts.objective
        );
        assert!(
            models::verify(p, &cuts.weights, None, None) < 1e-7,
            "{what}"
        );
    }
}

/// The method is chosen from the scenario count: with HiGHS (warm-started) cutting planes from
/// `CUTS_FROM_SCENARIOS` scenarios whatever the number of assets; with Clarabel from
/// `CUTS_FROM_SCENARIOS_REBUILT`; below, the direct LP. The thresholds are this
/// project's own, set from `tailpack bench` measurements (README, "Performance").
#[test]
fn the_cutting_plane_method_is_chosen_by_scenario_count() {
    use tailpack::models::{CUTS_FROM_SCENARIOS, CUTS_FROM_SCENARIOS_REBUILT, Method, method_for};
    let (h, c) = (CUTS_FROM_SCENARIOS, CUTS_FROM_SCENARIOS_REBUILT);
    assert!(h < c);
    assert_eq!(method_for(h - 1, Backend::Highs), Method::Direct);
    assert_eq!(method_for(h, Backend::Highs), Method::Cuts);
    assert_eq!(method_for(c - 1, Backend::Clarabel), Method::Direct);
    assert_eq!(method_for(c, Backend::Clarabel), Method::Cuts);
    let i = instance(2);
    let p = i.problem();
    assert_eq!(p.method(), method_for(i.set.len(), Backend::Highs));
}

/// A scenario return of 1e300 — finite, but no price series — with otherwise ordinary data: the set X
/// (bounds and budget) plainly has portfolios, so whatever the solver does with the CVaR LPs, no message
/// may say X is empty, and the ratio preconditions count as not established rather than failed.
#[test]
fn failed_auxiliary_lps_claim_nothing_about_the_feasible_set() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(11);
    let s = 40;
    let mut returns: Vec<f64> = (0..2 * s).map(|_| 0.01 * normal(&mut rng)).collect();
    returns[7] = 1e300;
    let set = ScenarioSet::from_matrix(
        vec!["A".into(), "B".into()],
        returns,
        vec![1.0 / s as f64; s],
    )
    .unwrap();
    let fs = Limits::long_only(2).build();
    // x = (1, 0) meets the bounds and the budget: X is not empty.
    assert_eq!(
        models::explain_empty(&fs, &set.assets, Backend::Highs),
        models::Emptiness::NotEmpty
    );
    let p = problem(&set, &fs, 0.95);
    let min = p.min_cvar(None).map(|s| s.objective);
    let max = p.max_return(None).map(|s| s.objective);
    assert!(
        min.is_err() || max.is_err(),
        "premise: HiGHS refuses coefficients of 1e300 ({min:?}, {max:?})"
    );
    let pre = models::preconditions(&min, &max, false);
    assert!(!pre.holds && !pre.established);
    let reason = pre.reason.unwrap();
    assert!(!reason.contains("empty"), "{reason}");
    assert!(reason.contains("could not be established"), "{reason}");
    // The same verdicts from explicit failures: a solver error is no finding about X.
    let words = models::lp::Failure::Solver("status Error".into());
    let pre = models::preconditions(&Err(words), &Ok(0.01), false);
    assert!(!pre.established && pre.reason.unwrap().contains("solver: status Error"));
    let pre = models::preconditions(&Ok(0.02), &Ok(-0.01), false);
    assert!(pre.established && !pre.holds);
}

/// A solver's "infeasible" that a known portfolio contradicts is reported as a solver error; without such
/// a portfolio the infeasibility stands; an optimum is never touched.
#[test]
fn an_infeasible_verdict_contradicted_by_a_known_portfolio_is_a_solver_error() {
    use tailpack::models::{Outcome, Status, unless_contradicted};
    let infeasible = || Outcome::failed(Status::Infeasible, "cap infeasible".into());
    let o = unless_contradicted(
        infeasible(),
        Some("the minimum-CVaR portfolio meets the cap".into()),
    );
    assert_eq!(o.status, Status::SolverError);
    let msg = o.message.unwrap();
    assert!(
        msg.contains("numerical failure") && msg.contains("meets the cap"),
        "{msg}"
    );
    assert_eq!(
        unless_contradicted(infeasible(), None).status,
        Status::Infeasible
    );
    let optimal = Outcome {
        status: Status::Optimal,
        message: None,
        weights: Some(vec![1.0]),
        objective: Some(0.1),
        scale: None,
        max_violation: Some(0.0),
    };
    let o = unless_contradicted(optimal, Some("anything".into()));
    assert_eq!(o.status, Status::Optimal);
}

/// X shown empty by its bound sums, or by a feasibility LP: `Empty` with the reason.
#[test]
fn an_empty_feasible_set_is_shown_not_assumed() {
    let names = vec!["A".to_string(), "B".to_string()];
    let sums = Limits::long_only(2).lower(vec![0.6, 0.6]).build();
    assert!(matches!(
        models::explain_empty(&sums, &names, Backend::Highs),
        models::Emptiness::Empty(m) if m.contains("sum to 1.2000 > 1")
    ));
    // Two groups over the same asset that cannot both hold: only the feasibility LP shows it.
    let clash = Limits::long_only(2)
        .group("Low", &[0], 0.0, 0.3)
        .group("High", &[0], 0.5, 1.0)
        .build();
    match models::explain_empty(&clash, &names, Backend::Highs) {
        models::Emptiness::Empty(m) => assert!(m.contains("group `Low`"), "{m}"),
        other => panic!("{other:?}"),
    }
}

/// Should a huge price ever get past ingest's range check, the scenario stage stops with a data error
/// (exit 3) naming the prices file, the asset's column and the dates — before any LP or model message.
#[test]
fn a_return_beyond_the_bound_that_reaches_the_models_is_a_data_error() {
    use super::common::{Fixture, Market, config};
    let f = Fixture::new();
    let m = Market::new(3, "2022-01-03", "2024-06-28", 4);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 0\n"));
    let prepared = tailpack::run::prepare(
        &f.path("fund.yaml"),
        &tailpack::config::Overrides::default(),
    )
    .unwrap();
    let (cfg, mut data) = (prepared.cfg, prepared.data);
    let k = data.dates.len() - 3;
    let day = data.dates[k];
    data.prices[1][k] = 1e300;
    let Err(e) = tailpack::run::compute(cfg, data, 0) else {
        panic!("a return of about 1e298 must not reach the models");
    };
    assert_eq!(e.exit_code(), 3);
    let msg = e.to_string();
    assert!(
        msg.contains("prices.csv")
            && msg.contains("column `AS02`")
            && msg.contains(&day.to_string()),
        "{msg}"
    );
}

/// Issue 15: the run and the walk-forward backtest take their models from one function
/// (`models::solve_all`), so they cannot drift apart. The backtest rebuilds its first month-end D from prices
/// dated on or before D with the run's lookback, limits and rules; its decision for each family must then be
/// the run's own outcome for as-of D and that of a direct `solve_all` on the prepared problem of D — same
/// status, bit-identical weights. The rules used (cap a multiple of the minimum CVaR over X, floor the
/// current return, a turnover limit) need both auxiliary LPs and the current holdings, so a backtest that
/// resolved them, screened X or solved a family another way would fail here.
#[test]
fn the_backtest_decides_each_month_as_the_run_solves() {
    use super::common::{Fixture, Market, config};
    use tailpack::config::Overrides;
    use tailpack::models::{Family, Premises, Targets};
    use tailpack::run;
    let f = Fixture::new();
    let m = Market::new(4, "2020-01-01", "2024-06-28", 23);
    let tail = "limits:\n  turnover_max: 0.8\nmodels:\n  max_return:\n    cvar_cap: { times_min: 1.2 }\n  min_cvar:\n    return_floor: { plus_current: 0.0 }\nanalysis:\n  frontier_points: 2\n  backtest_years: 1\n";
    let path = f.small_fund(&m, &config(tail));
    let latest = run::solve(run::prepare(&path, &Overrides::default()).unwrap(), 0).unwrap();
    let backtest = latest.analysis.backtest.expect("one year of backtest");
    let first = backtest.rebalances[0];
    let then = run::prepare(
        &path,
        &Overrides {
            as_of: Some(first),
            ..Default::default()
        },
    )
    .unwrap();
    assert_eq!(then.data.as_of, first);
    let c = then.cfg.confidence;
    let p = Problem {
        backend: then.cfg.backend,
        ..problem(&then.scenarios, &then.feasible, c)
    };
    let current = then
        .data
        .holdings
        .as_ref()
        .map(|h| tailpack::risk::profile(&then.scenarios, h, &[c], c));
    let targets = Targets {
        cap: then.cfg.cap,
        floor: then.cfg.floor,
        current: current.as_ref(),
    };
    let direct = models::solve_all(&p, &targets, Premises::Establish);
    let run_then = run::solve(then.clone(), 0).unwrap();
    let mut optimal = 0;
    for (k, family) in Family::ALL.into_iter().enumerate() {
        let (track, reported) = (&backtest.tracks[k], &run_then.models[k]);
        assert_eq!((track.model, reported.family), (family.name(), family));
        let (row, o) = (&track.rows[0], direct.outcome(family));
        assert_eq!(row.date, first);
        assert_eq!(row.status, o.status.word(), "{family:?}");
        assert_eq!(
            row.weights, o.weights,
            "{family:?}: backtest vs direct solve"
        );
        assert_eq!(
            reported.outcome.weights, o.weights,
            "{family:?}: run vs direct solve"
        );
        optimal += usize::from(o.weights.is_some());
    }
    assert_eq!(
        optimal,
        Family::ALL.len(),
        "every family has a portfolio to compare"
    );
}

/// `costed(seed)` with a benchmark outside the universe (0.6 × the assets' mean return plus 0.4 × a series
/// of its own) and an active-CVaR budget halfway between the minimum active CVaR over X and the active
/// CVaR of the capped max-return portfolio without a budget, so that it binds; the cap and floor set
/// again on the smaller set.
fn budgeted(seed: u64) -> Instance {
    let mut i = costed(seed);
    let mut rng = rand::rngs::StdRng::seed_from_u64(2000 + seed);
    let n = i.set.width() as f64;
    let b: Vec<f64> = (0..i.set.len())
        .map(|k| {
            let mean = i.set.row(k).iter().sum::<f64>() / n;
            0.6 * mean + 0.4 * (0.002 + 0.012 * normal(&mut rng))
        })
        .collect();
    let free = i.problem().max_return(Some(i.cap)).unwrap().weights;
    let high = active_cvar_of(&i.set, &free, &b, i.c);
    i.active = Some((b, f64::INFINITY));
    let low = i
        .problem()
        .min_active_cvar_by(Method::Direct)
        .unwrap()
        .objective;
    assert!(
        high > low + 1e-4,
        "seed {seed}: no room for a binding budget"
    );
    i.active.as_mut().unwrap().1 = low + 0.5 * (high - low);
    with_cap_and_floor(i)
}

/// Issue 16: the models with an active-CVaR budget (and costs, bounds, a group and a turnover limit)
/// against scipy's HiGHS `linprog` (`tests/reference/cvar_reference.py`, which writes the budget through
/// its own Rockafellar–Uryasev rows of the active loss, and solves the ratio both by Dinkelbach's method
/// and by its own Charnes–Cooper LP), on every solve path: the direct LP and the cutting planes, with
/// HiGHS and (on three seeds) with Clarabel.
#[test]
fn active_budget_optima_match_scipy_highs_on_every_solve_path() {
    let mut binding = 0;
    for seed in 0..8u64 {
        let i = budgeted(seed);
        let budget = i.active.as_ref().unwrap().1;
        let r = reference(&i);
        let reference_of = |m: &str| r[m]["objective"].as_f64().unwrap();
        // The two reference methods for the ratio agree with each other first.
        close(
            reference_of("max_ratio_cc"),
            reference_of("max_ratio"),
            1e-6,
            &format!("seed {seed}: reference Charnes–Cooper vs Dinkelbach"),
        );
        let a = r["max_return"]["active_cvar"].as_f64().unwrap();
        assert!(a <= budget + 1e-7, "seed {seed}: reference over budget");
        binding += usize::from(a >= budget - 1e-6);
        let backends: &[Backend] = if seed < 3 {
            &[Backend::Highs, Backend::Clarabel]
        } else {
            &[Backend::Highs]
        };
        for &backend in backends {
            for method in [Method::Direct, Method::Cuts] {
                let p = Problem {
                    backend,
                    ..i.problem()
                };
                let tol = if backend == Backend::Highs {
                    1e-7
                } else {
                    1e-6
                };
                let what =
                    |m: &str| format!("seed {seed} {backend:?} {method:?} {m} with a budget");
                let mr = p.max_return_by(Some(i.cap), method).unwrap();
                close(
                    mr.objective,
                    reference_of("max_return"),
                    tol,
                    &what("max_return"),
                );
                let mc = p.min_cvar_by(Some(i.floor), method).unwrap();
                close(
                    mc.objective,
                    reference_of("min_cvar"),
                    tol,
                    &what("min_cvar"),
                );
                let ratio = p.max_ratio_by(method).unwrap();
                let got =
                    models::net_return(&p, &ratio.weights) / cvar_of(&i.set, &ratio.weights, i.c);
                close(got, reference_of("max_ratio_cc"), 1e-6, &what("max_ratio"));
                let low = p.min_active_cvar_by(method).unwrap().objective;
                close(
                    low,
                    reference_of("min_active_cvar_over_x"),
                    tol,
                    &what("min active CVaR"),
                );
                close(
                    p.min_cvar_by(None, method).unwrap().objective,
                    reference_of("min_cvar_over_x"),
                    tol,
                    &what("min CVaR over X"),
                );
                // Each portfolio keeps the budget, recomputed here from its weights by sorting.
                for (m, x) in [
                    ("max_return", &mr.weights),
                    ("min_cvar", &mc.weights),
                    ("max_ratio", &ratio.weights),
                ] {
                    let (b, _) = i.active.as_ref().unwrap();
                    let active = active_cvar_of(&i.set, x, b, i.c);
                    assert!(
                        active <= budget + 1e-6,
                        "{}: active CVaR {active} over {budget}",
                        what(m)
                    );
                }
                assert!(models::verify(&p, &mr.weights, Some(i.cap), None) < 1e-6);
                assert!(models::verify(&p, &mc.weights, None, Some(i.floor)) < 1e-6);
                assert!(models::verify(&p, &ratio.weights, None, None) < 1e-6);
            }
        }
    }
    assert!(
        binding >= 4,
        "the budget binds max_return on only {binding} of 8 seeds"
    );
}

/// Issue 17: the bands' resamples solve every family with `Premises::Shown` — the feasibility LP skipped
/// because the run showed X non-empty, and a family whose own rule does not bind at an auxiliary optimum
/// taking that optimum. The optimum must be the one the run's path (`Premises::Establish`) finds, to 1e-9
/// relative: a max-return portfolio is optimal under a cap it keeps within, a min-CVaR portfolio under a
/// floor it meets (an optimum over a larger set that is feasible in the smaller one; any LP text, e.g.
/// Bertsimas & Tsitsiklis, "Introduction to Linear Optimization", 1997, §1). Loose rules (every family
/// takes the auxiliary optimum) and binding ones (each solves its own LP), on both methods.
#[test]
fn shown_premises_give_the_optimum_the_run_finds() {
    use tailpack::config::{CapRule, FloorRule};
    use tailpack::models::{Family, Premises, Status, Targets};
    for seed in 0..6 {
        let i = instance(seed);
        let p = i.problem();
        let rules = [
            (CapRule::Value(10.0), FloorRule::Value(-10.0)),
            (CapRule::Value(i.cap), FloorRule::Value(i.floor)),
        ];
        for ((cap, floor), method) in rules
            .into_iter()
            .flat_map(|r| [(r, Method::Direct), (r, Method::Cuts)])
        {
            let targets = Targets {
                cap,
                floor,
                current: None,
            };
            let run = models::solve_all_by(&p, &targets, Premises::Establish, method);
            let shown = models::solve_all_by(&p, &targets, Premises::Shown, method);
            for family in Family::ALL {
                let (a, b) = (run.outcome(family), shown.outcome(family));
                let what = format!("seed {seed}, {family:?}, {method:?}, cap {cap:?}");
                assert_eq!(a.status, Status::Optimal, "{what}: {:?}", a.message);
                assert_eq!(b.status, a.status, "{what}");
                let (x, y) = (a.objective.unwrap(), b.objective.unwrap());
                assert!(
                    (x - y).abs() <= 1e-9 * x.abs().max(1e-6),
                    "{what}: {x} vs {y}"
                );
                // The objective recomputed from the weights (CVaR by sorting, return by μ·x net of costs).
                let of = |w: &[f64]| match family {
                    Family::MinCvar => cvar_of(&i.set, w, i.c),
                    Family::MaxReturn => models::net_return(&p, w),
                    Family::MaxRatio => models::net_return(&p, w) / cvar_of(&i.set, w, i.c),
                };
                let (u, v) = (
                    of(a.weights.as_ref().unwrap()),
                    of(b.weights.as_ref().unwrap()),
                );
                assert!(
                    (u - v).abs() <= 1e-9 * u.abs().max(1e-6),
                    "{what}: {u} vs {v}"
                );
            }
        }
    }
}

/// Issue 20: from `CUT_GROUPS_FROM_SCENARIOS` scenarios on, a cutting-plane block splits the scenarios
/// into groups with their own tail columns and cuts (the multi-cut form of Birge & Louveaux 1988), and all
/// LPs of one problem run one after another on one cut model whose cuts carry over and whose slack cuts are
/// deleted between LPs. Every LP of such a sequence — in the order a run and its frontier solve them, so
/// each starts from the cuts and basis the earlier ones left — must reach the optimum of its own direct
/// Rockafellar–Uryasev LP (Charnes–Cooper for the ratio), solved whole: 1e-7 relative, 1e-9 for the ratio.
#[test]
fn one_cut_model_with_scenario_groups_reaches_every_direct_optimum_in_sequence() {
    use tailpack::models::{CUT_GROUPS_FROM_SCENARIOS, Method, cut_groups};
    assert_eq!(cut_groups(CUT_GROUPS_FROM_SCENARIOS - 1), 1);
    assert!(cut_groups(CUT_GROUPS_FROM_SCENARIOS) > 1);
    for (n, s, seed) in [(60, 1_200, 11u64), (240, 1_000, 12)] {
        let sy = tailpack::bench::synthetic(n, s, seed);
        let p = sy.problem();
        let rel = |a: f64, b: f64| (a - b).abs() / b.abs().max(1e-12);
        let mut lps = p.lps(Method::Cuts);
        let low = lps.min_cvar(None).unwrap().objective;
        let direct_low = p.min_cvar_by(None, Method::Direct).unwrap().objective;
        assert!(
            rel(low, direct_low) <= 1e-7,
            "{n}x{s} min CVaR {low} vs {direct_low}"
        );
        let high = lps.max_return(None).unwrap().objective;
        let capped = lps.max_return(Some(sy.cap)).unwrap();
        let direct_capped = p.max_return_by(Some(sy.cap), Method::Direct).unwrap();
        assert!(
            rel(capped.objective, direct_capped.objective) <= 1e-7,
            "{n}x{s} capped"
        );
        assert!(models::verify(&p, &capped.weights, Some(sy.cap), None) < 1e-7);
        let floored = lps.min_cvar(Some(sy.floor)).unwrap();
        let direct_floored = p.min_cvar_by(Some(sy.floor), Method::Direct).unwrap();
        assert!(
            rel(floored.objective, direct_floored.objective) <= 1e-7,
            "{n}x{s} floored"
        );
        assert!(models::verify(&p, &floored.weights, None, Some(sy.floor)) < 1e-7);
        let ratio = lps.max_ratio().unwrap();
        let direct_ratio = p.max_ratio_by(Method::Direct).unwrap().objective;
        assert!(rel(ratio.objective, direct_ratio) <= 1e-9, "{n}x{s} ratio");
        // The frontier's caps from the low to the high end, on the same model.
        let top = cvar_of(p.set, &p.max_return(None).unwrap().weights, p.confidence);
        assert!(high >= capped.objective);
        for j in 1..5 {
            let cap = low + (top - low) * j as f64 / 4.0;
            let got = lps.max_return(Some(cap)).unwrap().objective;
            let want = p
                .max_return_by(Some(cap), Method::Direct)
                .unwrap()
                .objective;
            assert!(rel(got, want) <= 1e-7, "{n}x{s} cap {cap}: {got} vs {want}");
        }
    }
}

/// A portfolio holding few of many assets is evaluated on its holdings' cells only
/// (`scenarios::SPARSE_BELOW`); the returns agree with the full dot product of every row to rounding.
#[test]
fn sparse_portfolios_are_evaluated_like_dense_ones() {
    let sy = tailpack::bench::synthetic(400, 700, 5);
    let mut x = vec![0.0; 400];
    for (k, i) in [3usize, 50, 51, 177, 390].iter().enumerate() {
        x[*i] = 0.1 + 0.05 * k as f64;
    }
    let got = sy.set.portfolio_returns(&x);
    for (k, value) in got.iter().enumerate() {
        let want: f64 = sy.set.row(k).iter().zip(&x).map(|(r, w)| r * w).sum();
        assert!(
            (value - want).abs() <= 1e-15,
            "scenario {k}: {value} vs {want}"
        );
    }
}
