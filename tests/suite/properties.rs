//! Property tests on random scenario sets and portfolios (proptest, fixed seeds so a failure reproduces).
//!
//! The risk measures are held to published properties, each named beside its check:
//! - the definitions in README ("Definitions"): VaR_c is the lower c-quantile of the loss, CVaR_c is
//!   VaR_c + 1/(1−c)·Σ p_k (L_k − VaR_c)+, and CVaR_c = min over ℓ of the Rockafellar & Uryasev (2000,
//!   "Optimization of conditional value-at-risk", J. Risk 2(3), Theorem 1) function F_c(ℓ), recomputed here
//!   from the formula, not from tailpack;
//! - the four axioms of a coherent risk measure (Artzner, Delbaen, Eber & Heath 1999, "Coherent measures of
//!   risk", Mathematical Finance 9): monotonicity, subadditivity, positive homogeneity, translation
//!   invariance, which CVaR (expected shortfall) satisfies on any discrete distribution (Acerbi & Tasche
//!   2002, "On the coherence of expected shortfall", J. Banking & Finance 26);
//! - expected shortfall is non-decreasing in the level c and lies between the mean loss and the worst loss
//!   (Acerbi & Tasche 2002);
//! - the Euler allocation: component CVaRs add up to the CVaR (Tasche 1999, "Risk contributions and
//!   performance measurement").
//!
//! The LP models are held to their constraints after the in-code check, and the ratio model to the
//! Charnes & Cooper (1962) change of variables (the scaled CVaR row binds, so t = 1/CVaR(x)).

use proptest::prelude::*;
use proptest::test_runner::{Config, RngSeed};
use rand::{RngExt, SeedableRng};
use tailpack::config::Backend;
use tailpack::models::{self, FeasibleSet, Group, Problem};
use tailpack::risk::{profile, tail_weights, var_cvar};
use tailpack::scenarios::ScenarioSet;

/// Rounding allowance of sums over at most a few hundred terms scaled by 1/(1−c) ≤ 100.
const TOL: f64 = 1e-10;

fn config(cases: u32, seed: u64) -> Config {
    Config {
        cases,
        rng_seed: RngSeed::Fixed(seed),
        failure_persistence: None,
        ..Config::default()
    }
}

/// Losses in ±0.5, optionally on a coarse grid so that ties (atoms at VaR) are common, with equal or
/// random positive probabilities summing to 1.
fn losses_and_probs(max_s: usize) -> impl Strategy<Value = (Vec<f64>, Vec<f64>)> {
    (1..max_s)
        .prop_flat_map(|s| {
            (
                prop::collection::vec(-0.5f64..0.5, s),
                prop::collection::vec(0.05f64..1.0, s),
                any::<bool>(),
                any::<bool>(),
            )
        })
        .prop_map(|(l, w, coarse, equal)| {
            let l = if coarse {
                l.iter().map(|x| (x * 20.0).round() / 20.0).collect()
            } else {
                l
            };
            (l, probabilities(&w, equal))
        })
}

fn probabilities(w: &[f64], equal: bool) -> Vec<f64> {
    let s = w.len();
    if equal {
        return vec![1.0 / s as f64; s];
    }
    let total: f64 = w.iter().sum();
    w.iter().map(|x| x / total).collect()
}

/// Levels: the common reporting levels, where k/S boundaries fall exactly on c for equal probabilities,
/// and anything in between.
fn level() -> impl Strategy<Value = f64> {
    prop_oneof![
        Just(0.9),
        Just(0.95),
        Just(0.975),
        Just(0.99),
        0.5f64..0.995
    ]
}

fn cvar(l: &[f64], p: &[f64], c: f64) -> f64 {
    var_cvar(l, p, c).cvar
}

/// F_c(ℓ) = ℓ + 1/(1−c)·Σ p_k (L_k − ℓ)+ (Rockafellar & Uryasev 2000, eq. 3 for discrete losses).
fn ru(l: &[f64], p: &[f64], c: f64, ell: f64) -> f64 {
    ell + l
        .iter()
        .zip(p)
        .map(|(x, q)| q * (x - ell).max(0.0))
        .sum::<f64>()
        / (1.0 - c)
}

proptest! {
    #![proptest_config(config(256, 1))]

    /// README "Definitions": VaR is the smallest loss ℓ with P(L ≤ ℓ) ≥ c; CVaR ≥ VaR.
    #[test]
    fn var_is_the_lower_quantile_and_cvar_is_at_least_var((l, p) in losses_and_probs(60), c in level()) {
        let t = var_cvar(&l, &p, c);
        let below_or_at: f64 = l.iter().zip(&p).filter(|(x, _)| **x <= t.var).map(|(_, q)| q).sum();
        let below: f64 = l.iter().zip(&p).filter(|(x, _)| **x < t.var).map(|(_, q)| q).sum();
        prop_assert!(l.contains(&t.var), "VaR is one of the losses");
        prop_assert!(below_or_at >= c - 1e-9, "P(L ≤ VaR) = {below_or_at} < c = {c}");
        prop_assert!(below < c + 1e-9, "P(L < VaR) = {below} ≥ c = {c}: a smaller loss already reaches c");
        prop_assert!(t.cvar >= t.var - TOL, "CVaR {} < VaR {}", t.cvar, t.var);
    }

    /// Rockafellar & Uryasev (2000), Theorem 1: CVaR_c = min over ℓ of F_c(ℓ); for discrete losses the
    /// minimum of the convex piecewise-linear F_c is at one of the losses, and no ℓ goes below it.
    #[test]
    fn cvar_is_the_minimum_of_the_rockafellar_uryasev_function((l, p) in losses_and_probs(60), c in level(), ell in -1.0f64..1.0) {
        let min = l.iter().map(|x| ru(&l, &p, c, *x)).fold(f64::INFINITY, f64::min);
        let got = cvar(&l, &p, c);
        prop_assert!((got - min).abs() <= TOL * (1.0 + min.abs()), "CVaR {got} vs min F {min}");
        prop_assert!(ru(&l, &p, c, ell) >= got - TOL);
    }

    /// Acerbi & Tasche (2002): expected shortfall is non-decreasing in the level and lies between the mean
    /// loss and the worst loss.
    #[test]
    fn cvar_is_non_decreasing_in_the_level_and_bounded((l, p) in losses_and_probs(60), a in level(), b in level()) {
        let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
        prop_assert!(cvar(&l, &p, lo) <= cvar(&l, &p, hi) + TOL, "CVaR at {lo} above CVaR at {hi}");
        let mean: f64 = l.iter().zip(&p).map(|(x, q)| x * q).sum();
        let worst = l.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        prop_assert!(cvar(&l, &p, lo) >= mean - TOL && cvar(&l, &p, hi) <= worst + TOL);
    }

    /// Artzner et al. (1999), axiom S (subadditivity), which expected shortfall satisfies (Acerbi & Tasche
    /// 2002): the loss of two positions held together, scenario by scenario, has CVaR at most the sum.
    #[test]
    fn cvar_is_subadditive(((lx, p), seed) in (losses_and_probs(60), any::<u64>()), c in level()) {
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let ly: Vec<f64> = lx.iter().map(|_| rng.random::<f64>() - 0.5).collect();
        let sum: Vec<f64> = lx.iter().zip(&ly).map(|(a, b)| a + b).collect();
        prop_assert!(cvar(&sum, &p, c) <= cvar(&lx, &p, c) + cvar(&ly, &p, c) + TOL);
    }

    /// Artzner et al. (1999), axiom PH (positive homogeneity): CVaR(λL) = λ·CVaR(L) for λ ≥ 0.
    #[test]
    fn cvar_is_positively_homogeneous((l, p) in losses_and_probs(60), c in level(), lambda in 0.0f64..10.0) {
        let scaled: Vec<f64> = l.iter().map(|x| lambda * x).collect();
        let (a, b) = (cvar(&scaled, &p, c), lambda * cvar(&l, &p, c));
        prop_assert!((a - b).abs() <= TOL * (1.0 + b.abs()), "CVaR(λL) {a} vs λ CVaR(L) {b}");
    }

    /// Artzner et al. (1999), axiom T (translation invariance): a riskless gain a in every scenario lowers
    /// the CVaR of the loss by exactly a.
    #[test]
    fn a_riskless_gain_lowers_cvar_by_itself((l, p) in losses_and_probs(60), c in level(), a in -1.0f64..1.0) {
        let shifted: Vec<f64> = l.iter().map(|x| x - a).collect();
        let (got, want) = (cvar(&shifted, &p, c), cvar(&l, &p, c) - a);
        prop_assert!((got - want).abs() <= TOL, "CVaR(L − a) {got} vs CVaR(L) − a {want}");
    }

    /// Artzner et al. (1999), axiom M (monotonicity): losses at least as large in every scenario have at
    /// least as large a CVaR.
    #[test]
    fn larger_losses_in_every_scenario_have_larger_cvar(((l, p), seed) in (losses_and_probs(60), any::<u64>()), c in level()) {
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let worse: Vec<f64> = l.iter().map(|x| x + if rng.random::<bool>() { rng.random::<f64>() * 0.3 } else { 0.0 }).collect();
        prop_assert!(cvar(&l, &p, c) <= cvar(&worse, &p, c) + TOL);
    }

    /// The dual form of CVaR (Acerbi & Tasche 2002; Rockafellar & Uryasev 2002): CVaR = Σ q_k L_k for tail
    /// weights with 0 ≤ q_k ≤ p_k/(1−c) and Σ q_k = 1.
    #[test]
    fn tail_weights_are_a_density_bounded_by_p_over_one_minus_c((l, p) in losses_and_probs(60), c in level()) {
        let q = tail_weights(&l, &p, c);
        prop_assert!((q.iter().sum::<f64>() - 1.0).abs() <= 1e-9, "Σ q = {}", q.iter().sum::<f64>());
        for (qk, pk) in q.iter().zip(&p) {
            prop_assert!(*qk >= 0.0 && *qk <= pk / (1.0 - c) + 1e-12);
        }
        let weighted: f64 = q.iter().zip(&l).map(|(a, b)| a * b).sum();
        prop_assert!((weighted - cvar(&l, &p, c)).abs() <= TOL);
    }

    /// Tasche (1999), Euler allocation: the per-asset CVaR contributions of a portfolio add up to its CVaR.
    #[test]
    fn component_cvar_adds_up_to_cvar(n in 1usize..6, (l, p) in losses_and_probs(50), seed in any::<u64>(), c in level()) {
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let s = l.len();
        let returns: Vec<f64> = (0..s * n).map(|i| -l[i / n] * (0.5 + rng.random::<f64>()) + 0.01 * (rng.random::<f64>() - 0.5)).collect();
        let raw: Vec<f64> = (0..n).map(|_| rng.random::<f64>() + 0.01).collect();
        let x: Vec<f64> = raw.iter().map(|w| w / raw.iter().sum::<f64>()).collect();
        let set = ScenarioSet::from_matrix((0..n).map(|i| format!("AS{:02}", i + 1)).collect(), returns, p).unwrap();
        let pr = profile(&set, &x, &[c], c);
        let total: f64 = pr.component_cvar.iter().sum();
        prop_assert!((total - pr.at(c).cvar).abs() <= TOL, "Σ components {total} vs CVaR {}", pr.at(c).cvar);
    }
}

/// A random LP instance: scenarios of a one-factor market with positive drift, bounds that leave room
/// for the budget, a group limit, and a turnover limit around equal current weights (which lie in X, so
/// X is never empty).
struct Instance {
    set: ScenarioSet,
    fs: FeasibleSet,
    c: f64,
}

fn instance(seed: u64) -> Instance {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let n = 2 + (rng.random::<u32>() % 4) as usize;
    let s = 30 + (rng.random::<u32>() % 60) as usize;
    let mut returns = Vec::with_capacity(n * s);
    for _ in 0..s {
        let f = super::common::normal(&mut rng);
        for i in 0..n {
            returns.push(
                0.002
                    + 0.001 * i as f64
                    + 0.02 * (0.3 + 0.2 * i as f64) * f
                    + 0.01 * super::common::normal(&mut rng),
            );
        }
    }
    let w: Vec<f64> = (0..s).map(|_| 0.1 + rng.random::<f64>()).collect();
    let set = ScenarioSet::from_matrix(
        (0..n).map(|i| format!("AS{:02}", i + 1)).collect(),
        returns,
        probabilities(&w, rng.random::<bool>()),
    )
    .unwrap();
    let upper: Vec<f64> = (0..n).map(|_| 0.5 + 0.5 * rng.random::<f64>()).collect();
    let lower: Vec<f64> = (0..n)
        .map(|_| {
            if rng.random::<bool>() {
                0.1 * rng.random::<f64>()
            } else {
                0.0
            }
        })
        .collect();
    let groups = if n >= 3 {
        vec![Group {
            name: "g".into(),
            members: vec![0, 1],
            min: 0.1,
            max: 0.9,
        }]
    } else {
        vec![]
    };
    let turnover_max = rng
        .random::<bool>()
        .then(|| 0.2 + 1.3 * rng.random::<f64>());
    let fs = FeasibleSet {
        lower,
        upper,
        groups,
        turnover_max,
        current: Some(vec![1.0 / n as f64; n]),
        cost_rates: vec![],
    };
    Instance {
        set,
        fs,
        c: [0.9, 0.95, 0.975][(seed % 3) as usize],
    }
}

/// The largest constraint violation this suite accepts of a HiGHS optimum after the in-code check.
const LP_TOL: f64 = 1e-9;

proptest! {
    #![proptest_config(config(24, 2))]

    /// Every optimum of the three models satisfies budget, bounds, group, turnover and its own CVaR cap or
    /// return floor to 1e-9, as recomputed by `models::verify` after `models::outcome` (tidy + check);
    /// the ratio model's weights are z/t with t = 1/CVaR(x) (Charnes & Cooper 1962: the scaled CVaR row
    /// binds), and t ≥ 1/max|r|, because a CVaR of a long-only budget portfolio is at most its worst loss.
    #[test]
    fn lp_optima_satisfy_their_constraints(seed in any::<u64>()) {
        let i = instance(seed);
        let p = Problem { set: &i.set, mu: i.set.mean(), confidence: i.c, feasible: &i.fs, backend: Backend::Highs, active: None };
        let min = p.min_cvar(None).expect("X holds the current portfolio");
        let best = p.max_return(None).expect("X holds the current portfolio");
        let cap = min.objective + 0.2 * min.objective.abs() + 1e-4;
        let lowest = models::dot(&p.mu, &min.weights);
        let floor = lowest + 0.5 * (best.objective - lowest);
        let outcomes = [
            ("max_return", models::outcome(&p, p.max_return(Some(cap)), Some(cap), None, String::new)),
            ("min_cvar", models::outcome(&p, p.min_cvar(Some(floor)), None, Some(floor), String::new)),
        ];
        for (name, o) in &outcomes {
            prop_assert_eq!(&o.status, &models::Status::Optimal, "{}: {:?}", name, o.message);
            let v = o.max_violation.unwrap();
            prop_assert!(v <= LP_TOL, "{}: violation {:e}", name, v);
            prop_assert_eq!(v, models::verify(&p, o.weights.as_ref().unwrap(), if *name == "max_return" { Some(cap) } else { None }, if *name == "min_cvar" { Some(floor) } else { None }));
        }
        prop_assume!(min.objective > 0.0 && best.objective > 0.0, "the ratio LP's preconditions");
        let ratio = models::outcome(&p, p.max_ratio(), None, None, String::new);
        prop_assert_eq!(&ratio.status, &models::Status::Optimal, "{:?}", ratio.message);
        prop_assert!(ratio.max_violation.unwrap() <= LP_TOL, "max_ratio violation {:e}", ratio.max_violation.unwrap());
        let x = ratio.weights.unwrap();
        let t = ratio.scale.unwrap();
        let worst = i.set.returns.iter().fold(0.0f64, |m, r| m.max(r.abs()));
        prop_assert!(t >= 1.0 / worst - 1e-9, "t = {} below 1/max|r| = {}", t, 1.0 / worst);
        let cvar_x = tailpack::risk::cvar_of(&i.set, &x, i.c);
        prop_assert!((t * cvar_x - 1.0).abs() <= 1e-7, "t·CVaR(x) = {} (must be 1)", t * cvar_x);
    }
}
