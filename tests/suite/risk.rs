//! Risk measures against closed forms and the Rockafellar–Uryasev characterisation.

use super::common::normal;
use rand::{RngExt, SeedableRng};
use statrs::distribution::{Continuous, ContinuousCDF, Normal};
use tailpack::risk::{ru_objective, tail_weights, var_cvar};

fn normal_sample(n: usize, seed: u64) -> Vec<f64> {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    (0..n).map(|_| normal(&mut rng)).collect()
}

/// Expected shortfall of the standard normal, ES_c = φ(Φ⁻¹(c)) / (1 − c)
/// (McNeil, Frey & Embrechts, Quantitative Risk Management, 2005, Example 2.18).
fn normal_es(c: f64) -> f64 {
    let z = Normal::standard();
    z.pdf(z.inverse_cdf(c)) / (1.0 - c)
}

#[test]
fn var_and_cvar_of_a_normal_sample_match_the_closed_form() {
    let n = 1_000_000;
    let losses = normal_sample(n, 7);
    let probs = vec![1.0 / n as f64; n];
    let z = Normal::standard();
    for c in [0.975, 0.99] {
        let t = var_cvar(&losses, &probs, c);
        let q = z.inverse_cdf(c);
        // Sampling error of the empirical quantile: sqrt(c(1−c)/n) / φ(q) (asymptotic normality of
        // sample quantiles, e.g. Serfling 1980, §2.3); of the ES estimator: sqrt(Var(L | L > q) +
        // c(ES − q)²) / sqrt(n(1−c)) (Chen 2008, J. Financial Econometrics 6). Five standard errors.
        let se_var = (c * (1.0 - c) / n as f64).sqrt() / z.pdf(q);
        let es = normal_es(c);
        let tail: Vec<f64> = losses.iter().copied().filter(|l| *l > q).collect();
        let tail_var = tail.iter().map(|l| (l - es).powi(2)).sum::<f64>() / tail.len() as f64;
        let se_es = ((tail_var + c * (es - q).powi(2)) / (n as f64 * (1.0 - c))).sqrt();
        assert!(
            (t.var - q).abs() < 5.0 * se_var,
            "VaR {c}: {} vs {q} (se {se_var})",
            t.var
        );
        assert!(
            (t.cvar - es).abs() < 5.0 * se_es,
            "CVaR {c}: {} vs {es} (se {se_es})",
            t.cvar
        );
    }
}

#[test]
fn es_975_is_close_to_var_99_under_normality() {
    // Basel Committee, Minimum capital requirements for market risk (2016): the 97.5% expected shortfall
    // of a normal distribution, 2.338σ, is close to its 99% VaR, 2.326σ.
    let z = Normal::standard();
    assert!((normal_es(0.975) - 2.338).abs() < 5e-4);
    assert!((z.inverse_cdf(0.99) - 2.326).abs() < 5e-4);
    let n = 1_000_000;
    let losses = normal_sample(n, 11);
    let probs = vec![1.0 / n as f64; n];
    let es = var_cvar(&losses, &probs, 0.975).cvar;
    let var = var_cvar(&losses, &probs, 0.99).var;
    assert!((es - var).abs() < 0.03, "ES97.5 {es} vs VaR99 {var}");
}

/// Random discrete losses on a coarse grid (many ties) with unequal probabilities.
fn discrete(seed: u64, s: usize) -> (Vec<f64>, Vec<f64>) {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let losses: Vec<f64> = (0..s)
        .map(|_| (rng.random_range(-5i32..=5) as f64) * 0.01)
        .collect();
    let raw: Vec<f64> = (0..s).map(|_| 0.1 + rng.random::<f64>()).collect();
    let total: f64 = raw.iter().sum();
    (losses, raw.iter().map(|w| w / total).collect())
}

#[test]
fn ru_minimiser_is_var_and_minimum_is_cvar() {
    // Rockafellar & Uryasev (2002), J. Banking & Finance 26, Theorem 10: F_c(ℓ) = ℓ + 1/(1−c) Σ p (L − ℓ)+ is
    // convex and piecewise linear with breakpoints at the losses; its minimum is CVaR_c and the left end of
    // the set of minimisers is VaR_c. Checked against the sort-based computation on 200 random cases.
    for seed in 0..200u64 {
        let (losses, probs) = discrete(seed, 5 + (seed as usize % 40));
        for c in [0.5, 0.8, 0.9, 0.95, 0.975] {
            let t = var_cvar(&losses, &probs, c);
            let mut points = losses.clone();
            points.sort_by(f64::total_cmp);
            points.dedup();
            let values: Vec<f64> = points
                .iter()
                .map(|&l| ru_objective(&losses, &probs, c, l))
                .collect();
            let best = values.iter().copied().fold(f64::INFINITY, f64::min);
            let argmin = points
                .iter()
                .zip(&values)
                .find(|(_, v)| **v <= best + 1e-12)
                .map(|(l, _)| *l)
                .unwrap();
            assert!(
                (best - t.cvar).abs() < 1e-12,
                "seed {seed} c {c}: min F {best} vs CVaR {}",
                t.cvar
            );
            assert_eq!(
                argmin, t.var,
                "seed {seed} c {c}: argmin {argmin} vs VaR {}",
                t.var
            );
            assert!(t.cvar >= t.var - 1e-15);
        }
    }
}

#[test]
fn var_is_the_lower_quantile_at_an_exact_atom() {
    // VaR_c = min{ℓ : P(L ≤ ℓ) ≥ c}: with four equally likely losses 1,2,3,4 and c = 0.75,
    // P(L ≤ 3) = 0.75 exactly, so VaR = 3 (not 4), and CVaR = 3 + (1/0.25)·0.25·(4 − 3) = 4.
    let t = var_cvar(&[1.0, 2.0, 3.0, 4.0], &[0.25; 4], 0.75);
    assert_eq!(t.var, 3.0);
    assert!((t.cvar - 4.0).abs() < 1e-12);
}

#[test]
fn tail_weights_reproduce_cvar() {
    for seed in 0..50u64 {
        let (losses, probs) = discrete(1000 + seed, 30);
        for c in [0.6, 0.9, 0.95] {
            let q = tail_weights(&losses, &probs, c);
            let via: f64 = q.iter().zip(&losses).map(|(w, l)| w * l).sum();
            assert!((via - var_cvar(&losses, &probs, c).cvar).abs() < 1e-12);
            assert!(
                (q.iter().sum::<f64>() - 1.0).abs() < 1e-12,
                "tail weights sum to 1"
            );
        }
    }
}

#[test]
fn hand_worked_portfolio_statistics() {
    // Three assets, five equally likely scenarios (p = 0.2), c = 0.6 so the tail is the worst two.
    //            A      B      C
    //   s1    -0.01  -0.03  -0.08
    //   s2    -0.01  -0.01  -0.04
    //   s3     0.01   0.03   0.06
    //   s4     0.02   0.04   0.08
    //   s5     0.03   0.07   0.13
    // Portfolio x = (0.5, 0.3, 0.2):
    //   portfolio returns r·x = s1 -0.005-0.009-0.016 = -0.030; s2 -0.005-0.003-0.008 = -0.016;
    //   s3 0.005+0.009+0.012 = 0.026; s4 0.010+0.012+0.016 = 0.038; s5 0.015+0.021+0.026 = 0.062.
    //   losses sorted: -0.062, -0.038, -0.026, 0.016, 0.030. Cumulative probability reaches 0.6 at the third,
    //   so VaR_0.6 = -0.026; CVaR = -0.026 + (1/0.4)·0.2·((0.016+0.026) + (0.030+0.026)) = -0.026 + 0.049 = 0.023
    //   = mean of the two worst losses (0.016 + 0.030)/2.
    //   expected return = (−0.030 − 0.016 + 0.026 + 0.038 + 0.062)/5 = 0.016.
    //   component CVaR = x_i · mean of −r_i over s1, s2: A 0.5·0.01 = 0.005, B 0.3·0.02 = 0.006,
    //   C 0.2·0.06 = 0.012; sum 0.023.
    let returns = vec![
        -0.01, -0.03, -0.08, -0.01, -0.01, -0.04, 0.01, 0.03, 0.06, 0.02, 0.04, 0.08, 0.03, 0.07,
        0.13,
    ];
    let set = tailpack::scenarios::ScenarioSet::from_matrix(
        vec!["A".into(), "B".into(), "C".into()],
        returns,
        vec![0.2; 5],
    )
    .unwrap();
    let p = tailpack::risk::profile(&set, &[0.5, 0.3, 0.2], &[0.6], 0.6);
    let t = p.at(0.6);
    assert!((t.var + 0.026).abs() < 1e-12, "VaR {}", t.var);
    assert!((t.cvar - 0.023).abs() < 1e-12, "CVaR {}", t.cvar);
    assert!((p.expected_return - 0.016).abs() < 1e-12);
    for (got, want) in p.component_cvar.iter().zip([0.005, 0.006, 0.012]) {
        assert!((got - want).abs() < 1e-12, "component {got} vs {want}");
    }
    assert!((p.worst_loss - 0.030).abs() < 1e-12);
    assert!((p.effective_holdings - 1.0 / 0.38).abs() < 1e-12);
}
