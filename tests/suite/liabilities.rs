//! Liabilities: surplus risk recomputed from the pack's scenario files, the asset-only figures when the
//! liabilities neither move nor differ from the assets, surplus volatility against its closed form, the
//! duration–convexity approximation against an exactly repriced bond, and the config's refusals.
//!
//! Definitions the expected values come from, independently of the library: the surplus return on assets
//! s_k = r_k·x − ℓ_k/F (Sharpe & Tint 1990, "Liabilities — a new approach", Journal of Portfolio
//! Management 16(2)); CVaR_c = min over ℓ of ℓ + 1/(1−c)·Σ p_k (L_k − ℓ)+ (Rockafellar & Uryasev 2000,
//! Theorem 1), evaluated at every scenario loss; VaR_c the lower c-quantile of the losses.

use super::common::{Fixture, Market, config, json, normal, portfolios};
use rand::SeedableRng;
use std::path::{Path, PathBuf};

/// Present value of the liabilities in the fixtures; the fund's value is 1,000,000.
const FUND_VALUE: f64 = 1_000_000.0;

/// Asset durations of the fixture's metadata: AS02 and AS04 (bonds) 6 and 12 years, equities none.
const DURATIONS: [Option<f64>; 4] = [None, Some(6.0), None, Some(12.0)];

/// A fund of four assets whose price file also holds `LIAB`, a series without a metadata row: `flat`
/// keeps it at 100 (zero returns), else it follows the second bond with noise of its own. `extra` is
/// appended to the config.
fn fund_with_proxy(f: &Fixture, flat: bool, extra: &str) -> PathBuf {
    let m = Market::new(4, "2022-01-03", "2024-06-28", 23);
    let mut csv = String::new();
    for (i, line) in m.wide_csv().lines().enumerate() {
        if i == 0 {
            csv.push_str(&format!("{line},LIAB\n"));
            continue;
        }
        let bond: f64 = line.split(',').nth(4).unwrap().parse().unwrap();
        let v = if flat {
            100.0
        } else {
            1.2 * bond + ((i * 7) % 11) as f64 * 0.05
        };
        csv.push_str(&format!("{line},{v:.6}\n"));
    }
    f.write("data/prices.csv", &csv);
    let mut assets = String::from("asset,class,max_weight,duration\n");
    for ((a, c), d) in m.assets.iter().zip(&m.classes).zip(DURATIONS) {
        let d = d.map_or(String::new(), |d| d.to_string());
        assets.push_str(&format!("{a},{c},0.6,{d}\n"));
    }
    f.write("data/assets.csv", &assets);
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.25\nAS02,0.25\nAS03,0.25\nAS04,0.25\n",
    );
    f.write(
        "fund.yaml",
        &config(&format!(
            "analysis:\n  backtest_years: 0\n  daily_var_check: false\n  band_resamples: 0\n{extra}"
        )),
    )
}

fn liabilities(value: f64, extra: &str) -> String {
    format!(
        "  value: {FUND_VALUE}\n  base_currency: CHF\nliabilities:\n  value: {value}\n  proxy: LIAB\n{extra}"
    )
}

/// The config text with the fund section's value lines (indented under `fund:`) in place.
fn with_fund_value(cfg: &PathBuf, f: &Fixture, fund: &str) -> PathBuf {
    let text = std::fs::read_to_string(cfg).unwrap();
    let text = text.replacen(
        "  name: Test Fund (fictional)\n",
        &format!("  name: Test Fund (fictional)\n{fund}"),
        1,
    );
    f.write("fund.yaml", &text)
}

/// The proxy's prices by date, read from the fixture's price file (its sixth column).
fn proxy_by_date(f: &Fixture) -> std::collections::BTreeMap<String, f64> {
    let prices = std::fs::read_to_string(f.path("data/prices.csv")).unwrap();
    prices
        .lines()
        .skip(1)
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            (cells[0].to_string(), cells[5].parse().unwrap())
        })
        .collect()
}

fn run_pack(f: &Fixture, cfg: &Path) -> PathBuf {
    let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet"]);
    assert_eq!(ran.code, 0, "stderr: {}", ran.stderr);
    PathBuf::from(ran.stdout.lines().last().unwrap())
}

/// Header names and rows of numbers after the label column of a CSV the pack wrote.
fn table(path: &PathBuf) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    let rows = lines
        .map(|l| l.split(',').skip(1).map(|c| c.parse().unwrap()).collect())
        .collect();
    (header[1..].to_vec(), rows)
}

/// VaR_c (lower c-quantile) and CVaR_c (Rockafellar–Uryasev minimisation at every loss), equal weights.
fn var_cvar(losses: &[f64], c: f64) -> (f64, f64) {
    let p = 1.0 / losses.len() as f64;
    let mut sorted = losses.to_vec();
    sorted.sort_by(f64::total_cmp);
    let var = sorted[((c * losses.len() as f64) - 1e-9).ceil() as usize - 1];
    let cvar = losses
        .iter()
        .map(|&l| l + losses.iter().map(|x| p * (x - l).max(0.0)).sum::<f64>() / (1.0 - c))
        .fold(f64::INFINITY, f64::min);
    (var, cvar)
}

#[test]
fn surplus_risk_hedge_ratio_and_rate_moves_recomputed_for_every_portfolio() {
    let f = Fixture::new();
    let cfg = fund_with_proxy(&f, false, "");
    let cfg = with_fund_value(
        &cfg,
        &f,
        &liabilities(1_050_000.0, "  duration: 14\n  convexity: 250\n"),
    );
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let (assets, rows) = table(&dir.join("scenarios.csv"));
    let (series, proxy_rows) = table(&dir.join("reference-scenarios.csv"));
    assert_eq!(
        series,
        ["LIAB"],
        "the proxy is a column of reference-scenarios.csv"
    );
    assert_eq!(assets, ["AS01", "AS02", "AS03", "AS04"]);
    let l = &r["liabilities"];
    let fr = FUND_VALUE / 1_050_000.0;
    assert!((l["funded_ratio"].as_f64().unwrap() - fr).abs() < 1e-12);
    assert_eq!(l["value"], 1_050_000.0);
    assert_eq!(l["proxy"], "LIAB");
    assert_eq!(l["duration"], 14.0);
    assert_eq!(l["basis"], "assets");
    for (name, x) in portfolios(&r, &assets) {
        // s_k = r_k·x − ℓ_k/F; losses −s_k.
        let losses: Vec<f64> = rows
            .iter()
            .zip(&proxy_rows)
            .map(|(row, p)| p[0] / fr - row.iter().zip(&x).map(|(r, w)| r * w).sum::<f64>())
            .collect();
        let (var, cvar) = var_cvar(&losses, 0.95);
        let got = &l["portfolios"][name.as_str()];
        assert!(
            (got["surplus_var"].as_f64().unwrap() - var).abs() < 1e-9,
            "{name}: {got}"
        );
        assert!(
            (got["surplus_cvar"].as_f64().unwrap() - cvar).abs() < 1e-9,
            "{name}: {got}"
        );
        for lv in got["levels"].as_array().unwrap() {
            let c = lv["level"].as_f64().unwrap();
            assert!((lv["cvar"].as_f64().unwrap() - var_cvar(&losses, c).1).abs() < 1e-9);
        }
        // Hedge ratio Σ A·w_i·D_i / (L·D_L) (the definition).
        let dollar: f64 = x
            .iter()
            .zip(DURATIONS)
            .map(|(w, d)| FUND_VALUE * w * d.unwrap_or(0.0))
            .sum();
        let hedge = dollar / (1_050_000.0 * 14.0);
        assert!(
            (got["hedge_ratio"].as_f64().unwrap() - hedge).abs() < 1e-12,
            "{name}"
        );
        // Funded ratio at ±1 pp: A(1 − D_A·Δy) / L(1 − D_L·Δy + ½·C_L·Δy²), D_A the value-weighted duration.
        for (key, dy) in [
            ("funded_ratio_rate_down", -0.01),
            ("funded_ratio_rate_up", 0.01),
        ] {
            let a = FUND_VALUE - dollar * dy;
            let liab = 1_050_000.0 * (1.0 - 14.0 * dy + 0.5 * 250.0 * dy * dy);
            assert!(
                (got[key].as_f64().unwrap() - a / liab).abs() < 1e-12,
                "{name} {key}"
            );
        }
    }
}

#[test]
fn a_flat_proxy_at_full_funding_gives_the_asset_only_figures() {
    let f = Fixture::new();
    let cfg = fund_with_proxy(&f, true, "");
    let cfg = with_fund_value(&cfg, &f, &liabilities(FUND_VALUE, ""));
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let l = &r["liabilities"];
    assert_eq!(l["funded_ratio"], 1.0);
    let current = &l["portfolios"]["current"];
    assert_eq!(current["surplus_cvar"], r["current"]["levels"][0]["cvar"]);
    let mut compared = 0;
    for (name, m) in r["models"].as_object().unwrap() {
        if m["weights"].is_object() {
            let got = &l["portfolios"][name.as_str()];
            assert!(
                (got["surplus_var"].as_f64().unwrap() - m["var"].as_f64().unwrap()).abs() < 1e-15,
                "{name}"
            );
            assert!(
                (got["surplus_cvar"].as_f64().unwrap() - m["cvar"].as_f64().unwrap()).abs() < 1e-15,
                "{name}"
            );
            assert!(
                (got["surplus_volatility"].as_f64().unwrap()
                    - m["risk"]["volatility"].as_f64().unwrap())
                .abs()
                    < 1e-15
            );
            compared += 1;
        }
    }
    assert!(compared >= 2);
    // No liabilities' duration: no hedge ratio, and a check says what it needs.
    assert!(current["hedge_ratio"].is_null());
    assert!(
        r["checks"]
            .as_array()
            .unwrap()
            .iter()
            .any(|c| c["id"] == "liabilities.durations")
    );
}

#[test]
fn surplus_volatility_matches_the_closed_form_on_a_bivariate_normal_sample() {
    // Var(S) = A²σ_A² + L²σ_L² − 2·A·L·ρ·σ_A·σ_L for the surplus S = A·R_A − L·R_L (Waring 2011, "Pension
    // Finance", ch. 5, surplus risk; the variance of a difference of correlated variables).
    let (a, l) = (100.0, 110.0);
    let (sa, sl, rho) = (0.10, 0.07, 0.4);
    let n = 200_000;
    let mut rng = rand::rngs::StdRng::seed_from_u64(19);
    let (mut ra, mut rl) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for _ in 0..n {
        let (z1, z2) = (normal(&mut rng), normal(&mut rng));
        ra.push(0.05 + sa * z1);
        rl.push(0.03 + sl * (rho * z1 + (1.0 - rho * rho).sqrt() * z2));
    }
    let set = tailpack::scenarios::ScenarioSet::from_matrix(
        vec!["A".into()],
        ra,
        vec![1.0 / n as f64; n],
    )
    .unwrap();
    let f = a / l;
    let offsets: Vec<f64> = rl.iter().map(|r| r / f).collect();
    let got = tailpack::risk::surplus(&set, &[1.0], &offsets, &[0.95]);
    let want = (a * a * sa * sa + l * l * sl * sl - 2.0 * a * l * rho * sa * sl).sqrt();
    // The surplus volatility is a fraction of the assets; its sampling error is about σ/√(2n) (0.16%).
    let rel = (got.volatility * a - want).abs() / want;
    assert!(
        rel < 0.01,
        "surplus volatility {} vs {want}",
        got.volatility * a
    );
    // The expected surplus return: E[R_A] − E[R_L]/F within sampling error (σ_S/√n ≈ 0.0002 of the assets).
    assert!((got.expected_return - (0.05 - 0.03 / f)).abs() < 0.001);
}

#[test]
fn duration_and_convexity_approximate_an_exactly_repriced_bond() {
    // A 20-year annual-pay 5% bond at a 5% yield (a worked example in the manner of Fabozzi, "Bond Markets,
    // Analysis and Strategies", ch. 4): price, modified duration and convexity from its cash flows, then
    // the approximation ΔP/P ≈ −D·Δy + ½·C·Δy² against the exact price at 4% and 6%.
    let price = |y: f64| -> f64 {
        (1..=20).map(|t| 5.0 / (1.0 + y).powi(t)).sum::<f64>() + 100.0 / (1.0 + y).powi(20)
    };
    let y = 0.05;
    let p0 = price(y);
    assert!((p0 - 100.0).abs() < 1e-9, "a par bond");
    let cf = |t: i32| if t == 20 { 105.0 } else { 5.0 };
    let macaulay: f64 = (1..=20)
        .map(|t| t as f64 * cf(t) / (1.0 + y).powi(t))
        .sum::<f64>()
        / p0;
    let modified = macaulay / (1.0 + y);
    let convexity: f64 = (1..=20)
        .map(|t| (t * (t + 1)) as f64 * cf(t) / (1.0 + y).powi(t + 2))
        .sum::<f64>()
        / p0;
    // A par bond's Macaulay duration in closed form, (1 + y)/y · (1 − (1 + y)^−n) (Fabozzi, ch. 4).
    let closed = (1.0 + y) / y * (1.0 - (1.0 + y).powi(-20));
    assert!((macaulay - closed).abs() < 1e-9, "{macaulay} vs {closed}");
    for dy in [-0.01, 0.01] {
        let exact = price(y + dy) / p0 - 1.0;
        let by_duration = tailpack::analysis::liabilities::value_change(modified, None, dy);
        let with_convexity =
            tailpack::analysis::liabilities::value_change(modified, Some(convexity), dy);
        assert!(
            (with_convexity - exact).abs() < 0.002,
            "{dy}: {with_convexity} vs {exact}"
        );
        assert!(
            (with_convexity - exact).abs() < (by_duration - exact).abs() / 5.0,
            "{dy}"
        );
    }
}

#[test]
fn liabilities_need_the_fund_value_and_a_non_investable_proxy() {
    let f = Fixture::new();
    let cfg = fund_with_proxy(&f, false, "liabilities:\n  value: 900000\n  proxy: LIAB\n");
    let ran = f.run(&["check", cfg.to_str().unwrap()]);
    assert_eq!(ran.code, 2, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("fund.value") && ran.stderr.contains("funded ratio"),
        "{}",
        ran.stderr
    );
    let cfg = fund_with_proxy(&f, false, "risk:\n  basis: surplus\n");
    let ran = f.run(&["check", cfg.to_str().unwrap()]);
    assert_eq!(ran.code, 2, "{}", ran.stderr);
    assert!(ran.stderr.contains("risk.basis"), "{}", ran.stderr);
    let cfg = fund_with_proxy(&f, false, "");
    let cfg = with_fund_value(
        &cfg,
        &f,
        &liabilities(900_000.0, "").replace("proxy: LIAB", "proxy: AS02"),
    );
    let ran = f.run(&["check", cfg.to_str().unwrap()]);
    assert_eq!(ran.code, 2, "{}", ran.stderr);
    assert!(
        ran.stderr
            .contains("liabilities.proxy: series `AS02` is an asset of the universe"),
        "{}",
        ran.stderr
    );
}

/// A random surplus instance: N assets (returns driven by one factor), the liabilities' return ℓ_k (rate
/// sensitive: loaded on the same factor with noise of its own) and funded ratio `f`; long-only X with
/// upper bounds, a group, current holdings and cost rates.
struct SurplusCase {
    set: tailpack::scenarios::ScenarioSet,
    offsets: Vec<f64>,
    fs: tailpack::models::FeasibleSet,
    c: f64,
}

fn surplus_case(seed: u64, liability_drift: f64) -> SurplusCase {
    use rand::RngExt;
    let mut rng = rand::rngs::StdRng::seed_from_u64(300 + seed);
    let n = 4 + (seed as usize % 3);
    let s = 160 + 60 * (seed as usize % 3);
    let (mut returns, mut offsets) = (Vec::with_capacity(n * s), Vec::with_capacity(s));
    let f = 0.85 + 0.05 * seed as f64;
    for _ in 0..s {
        let z = normal(&mut rng) * if rng.random::<f64>() < 0.1 { 3.0 } else { 1.0 };
        for i in 0..n {
            let beta = 0.1 + 0.2 * i as f64;
            returns.push(0.002 + 0.001 * i as f64 + 0.02 * beta * z + 0.01 * normal(&mut rng));
        }
        offsets.push((liability_drift + 0.012 * z + 0.006 * normal(&mut rng)) / f);
    }
    let probs = if seed.is_multiple_of(2) {
        vec![1.0 / s as f64; s]
    } else {
        tailpack::scenarios::decayed((0..s).rev().map(|a| a as f64), 60.0)
    };
    let set = tailpack::scenarios::ScenarioSet::from_matrix(
        (0..n).map(|i| format!("A{i}")).collect(),
        returns,
        probs,
    )
    .unwrap();
    let fs = tailpack::models::FeasibleSet {
        lower: vec![0.0; n],
        upper: (0..n).map(|i| if i % 2 == 0 { 0.5 } else { 0.7 }).collect(),
        groups: vec![tailpack::models::Group {
            name: "g".into(),
            members: vec![n - 1, n - 2],
            min: 0.1,
            max: 0.8,
        }],
        turnover_max: None,
        current: Some(vec![1.0 / n as f64; n]),
        cost_rates: (0..n).map(|i| 0.001 * (1 + i) as f64).collect(),
    };
    SurplusCase {
        set,
        offsets,
        fs,
        c: [0.9, 0.95][seed as usize % 2],
    }
}

/// Runs `tests/reference/cvar_reference.py` (scipy.optimize.linprog, method "highs") on a surplus case,
/// the liabilities given as `liability_offsets` c_k = ℓ_k/F beside the assets' own returns.
fn scipy_surplus(case: &SurplusCase, cap: f64, floor: f64) -> serde_json::Value {
    let rows: Vec<Vec<f64>> = (0..case.set.len())
        .map(|k| case.set.row(k).to_vec())
        .collect();
    let input = serde_json::json!({
        "confidence": case.c, "probabilities": case.set.probabilities, "returns": rows,
        "lower": case.fs.lower, "upper": case.fs.upper,
        "groups": case.fs.groups.iter().map(|g| serde_json::json!({"members": g.members, "min": g.min, "max": g.max})).collect::<Vec<_>>(),
        "turnover_max": null, "current": case.fs.current, "cost_rates": case.fs.cost_rates,
        "cvar_cap": cap, "return_floor": floor, "liability_offsets": case.offsets,
    });
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("instance.json");
    std::fs::write(&path, input.to_string()).unwrap();
    let out = std::process::Command::new("python3")
        .arg(super::common::repo().join("tests/reference/cvar_reference.py"))
        .arg(&path)
        .output()
        .expect("python3 must be installed (see README prerequisites)");
    assert!(
        out.status.success(),
        "reference solver failed (is scipy installed?): {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn near(a: f64, b: f64, tol: f64, what: &str) {
    assert!(
        (a - b).abs() <= tol * (1.0 + b.abs()),
        "{what}: tailpack {a} vs reference {b}"
    );
}

/// The three families on the surplus basis (`risk.basis: surplus`: the models' set less c_k in every
/// scenario) against scipy's HiGHS `linprog` on the surplus loss c_k − r_k·x written out in its own
/// Rockafellar–Uryasev rows (`tests/reference/cvar_reference.py`, the ratio by Dinkelbach's method),
/// with costs, bounds and a group, by the direct LP and the cutting planes.
#[test]
fn surplus_models_match_scipy_highs_on_random_instances() {
    use tailpack::models::{self, Method, Problem};
    for seed in 0..4u64 {
        let case = surplus_case(seed, 0.001);
        let basis = case.set.less_per_scenario(&case.offsets);
        let p = Problem {
            set: &basis,
            mu: basis.mean(),
            confidence: case.c,
            feasible: &case.fs,
            backend: tailpack::config::Backend::Highs,
            active: None,
        };
        let least = p.min_cvar(None).unwrap();
        let cap = least.objective * 1.3;
        let (low, high) = (
            models::net_return(&p, &least.weights),
            p.max_return(None).unwrap().objective,
        );
        let floor = low + 0.5 * (high - low);
        let r = scipy_surplus(&case, cap, floor);
        let of = |m: &str| r[m]["objective"].as_f64().unwrap();
        for method in [Method::Direct, Method::Cuts] {
            let what = |m: &str| format!("seed {seed} {method:?} {m} on the surplus basis");
            let mr = p.max_return_by(Some(cap), method).unwrap();
            near(mr.objective, of("max_return"), 1e-7, &what("max_return"));
            let mc = p.min_cvar_by(Some(floor), method).unwrap();
            near(mc.objective, of("min_cvar"), 1e-7, &what("min_cvar"));
            near(
                p.min_cvar_by(None, method).unwrap().objective,
                of("min_cvar_over_x"),
                1e-7,
                &what("min surplus CVaR over X"),
            );
            let ratio = p.max_ratio_by(method).unwrap();
            // The ratio of the portfolio found, on the surplus figures of the original set.
            let s = tailpack::risk::surplus(&case.set, &ratio.weights, &case.offsets, &[case.c]);
            let got =
                (s.expected_return - models::cost(&case.fs, &ratio.weights)) / s.at(case.c).cvar;
            near(
                got,
                of("max_ratio"),
                1e-6,
                &what("max_ratio (Dinkelbach reference)"),
            );
            // The capped max-return portfolio keeps the cap in surplus CVaR, recomputed from the surplus.
            let s = tailpack::risk::surplus(&case.set, &mr.weights, &case.offsets, &[case.c]);
            assert!(s.at(case.c).cvar <= cap + 1e-7, "{}", what("cap"));
        }
    }
}

/// A plan whose liabilities grow faster in expectation than any portfolio: the ratio model is not
/// applicable on the surplus basis, as the scipy reference finds, and the outcome says why in words.
#[test]
fn the_ratio_model_is_not_applicable_when_no_portfolio_beats_the_liabilities() {
    use tailpack::models::{self, Premises, Problem, Status, Targets};
    let case = surplus_case(1, 0.02);
    let basis = case.set.less_per_scenario(&case.offsets);
    let p = Problem {
        set: &basis,
        mu: basis.mean(),
        confidence: case.c,
        feasible: &case.fs,
        backend: tailpack::config::Backend::Highs,
        active: None,
    };
    let r = scipy_surplus(&case, 1.0, -1.0);
    assert_eq!(
        r["max_ratio"]["status"], "not_applicable",
        "{}",
        r["max_ratio"]
    );
    let highest = r["max_return_over_x"]["objective"].as_f64().unwrap();
    assert!(highest <= 0.0);
    let targets = Targets {
        cap: tailpack::config::CapRule::Value(1.0),
        floor: tailpack::config::FloorRule::Value(-1.0),
        current: None,
    };
    let solution = models::solve_all(&p, &targets, Premises::Establish);
    let ratio = &solution.families[2];
    assert_eq!(ratio.family, models::Family::MaxRatio);
    assert_eq!(ratio.outcome.status, Status::NotApplicable);
    near(
        solution.preconditions.max_return.unwrap(),
        highest,
        1e-7,
        "max expected surplus return over X",
    );
}

/// `risk.basis: surplus` in a run: the cap binds on the surplus CVaR recomputed from the pack's scenario
/// files, and every model's reported CVaR is its surplus CVaR.
#[test]
fn a_surplus_basis_run_caps_the_surplus_cvar_recomputed_from_the_scenario_files() {
    let f = Fixture::new();
    let extra =
        "risk:\n  basis: surplus\nmodels:\n  max_return:\n    cvar_cap:\n      times_min: 1.2\n";
    let cfg = fund_with_proxy(&f, false, extra);
    let cfg = with_fund_value(&cfg, &f, &liabilities(1_050_000.0, "  duration: 14\n"));
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    assert_eq!(r["liabilities"]["basis"], "surplus");
    let (assets, rows) = table(&dir.join("scenarios.csv"));
    let (_, proxy_rows) = table(&dir.join("reference-scenarios.csv"));
    let fr = FUND_VALUE / 1_050_000.0;
    let surplus_cvar = |x: &[f64]| {
        let losses: Vec<f64> = rows
            .iter()
            .zip(&proxy_rows)
            .map(|(row, p)| p[0] / fr - row.iter().zip(x).map(|(r, w)| r * w).sum::<f64>())
            .collect();
        var_cvar(&losses, 0.95).1
    };
    let ps = portfolios(&r, &assets);
    let weights = |name: &str| ps.iter().find(|(n, _)| n == name).unwrap().1.clone();
    // The least surplus CVaR over X (the auxiliary LP's figure), no lower than the min-CVaR model's.
    let least = r["preconditions"]["min_cvar"].as_f64().unwrap();
    assert!(least <= surplus_cvar(&weights("min_cvar")) + 1e-9);
    let capped = surplus_cvar(&weights("max_return"));
    assert!(capped <= 1.2 * least + 1e-7, "cap 1.2 × {least}: {capped}");
    assert!(
        capped >= 1.2 * least - 1e-6,
        "the cap binds: {capped} vs {}",
        1.2 * least
    );
    for (name, x) in &ps[1..] {
        let reported = r["models"][name.as_str()]["cvar"].as_f64().unwrap();
        assert!((reported - surplus_cvar(x)).abs() < 1e-9, "{name}");
    }
}

/// The walk-forward backtest on the surplus basis: each month's realised surplus return is the realised
/// return less the proxy's realised return (read from the price file) over the funded ratio, and the VaR
/// exceptions compare the predicted (surplus) VaR with it.
#[test]
fn the_backtest_on_the_surplus_basis_counts_exceptions_against_realised_surplus_returns() {
    let f = Fixture::new();
    let cfg = fund_with_proxy(&f, false, "risk:\n  basis: surplus\n");
    let text = std::fs::read_to_string(&cfg)
        .unwrap()
        .replace("backtest_years: 0", "backtest_years: 1");
    let cfg = f.write("fund.yaml", &text);
    let cfg = with_fund_value(&cfg, &f, &liabilities(1_050_000.0, ""));
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let proxy = proxy_by_date(&f);
    let fr = FUND_VALUE / 1_050_000.0;
    let b = &r["backtest"];
    assert_eq!(b["basis"], "surplus");
    let mut checked = 0;
    for (name, t) in b["models"].as_object().unwrap() {
        let mut exceptions = 0;
        for m in t["months"].as_array().unwrap() {
            let (Some(realised), Some(var)) =
                (m["realised_return"].as_f64(), m["predicted_var"].as_f64())
            else {
                continue;
            };
            let l = proxy[m["next"].as_str().unwrap()] / proxy[m["date"].as_str().unwrap()] - 1.0;
            let surplus = realised - l / fr;
            let got = m["realised_surplus_return"].as_f64().unwrap();
            assert!((got - surplus).abs() < 1e-12, "{name} {}", m["date"]);
            assert_eq!(
                m["exception"].as_bool().unwrap(),
                -surplus > var,
                "{name} {}",
                m["date"]
            );
            exceptions += usize::from(-surplus > var);
            checked += 1;
        }
        assert_eq!(
            t["exceptions"].as_u64().unwrap() as usize,
            exceptions,
            "{name}"
        );
    }
    assert!(checked >= 20, "{checked} months checked");
}

/// A shock that moves the liability proxy (a move naming it as `asset`) and the historical windows (the
/// proxy's own return over each window, from the price file): the change in surplus Σ w_i s_i − ℓ/F and
/// the funded ratio F·(1 + Σ w_i s_i)/(1 + ℓ) after it, for every portfolio.
#[test]
fn stress_shocks_move_the_liabilities_and_show_the_surplus_and_funded_ratio() {
    let f = Fixture::new();
    f.write(
        "stress.yaml",
        "shocks:\n  - name: Rates fall\n    moves:\n      - { tag: \"class:bond\", return: 0.04 }\n      - { tag: \"class:equity\", return: -0.10 }\n      - { asset: LIAB, return: 0.08 }\n",
    );
    let cfg = fund_with_proxy(
        &f,
        false,
        "stress:\n  file: stress.yaml\n  historical_windows: 2\n",
    );
    let cfg = with_fund_value(&cfg, &f, &liabilities(1_050_000.0, ""));
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let fr = FUND_VALUE / 1_050_000.0;
    let proxy = proxy_by_date(&f);
    let shocks = r["stress"]["shocks"]
        .as_array()
        .expect("stress shocks in results.json");
    assert_eq!(shocks.len(), 3);
    // The proxy's move per shock: 0.08 as defined, then its own return over each window.
    let mut moves = vec![0.08];
    for s in &shocks[1..] {
        let (a, b) = (s["start"].as_str().unwrap(), s["end"].as_str().unwrap());
        moves.push(proxy[b] / proxy[a] - 1.0);
    }
    let assets = ["AS01", "AS02", "AS03", "AS04"];
    for (name, x) in portfolios(&r, &assets.map(String::from)) {
        let got = r["liabilities"]["portfolios"][name.as_str()]["stress"]
            .as_array()
            .unwrap();
        for (k, s) in shocks.iter().enumerate() {
            let returns: Vec<f64> = assets
                .iter()
                .map(|a| s["returns"][a].as_f64().unwrap())
                .collect();
            let pnl: f64 = returns.iter().zip(&x).map(|(r, w)| r * w).sum();
            let want = pnl - moves[k] / fr;
            let g = &got[k];
            assert!(
                (g["surplus_change"].as_f64().unwrap() - want).abs() < 1e-12,
                "{name} shock {k}: {g}"
            );
            let funded = fr * (1.0 + pnl) / (1.0 + moves[k]);
            assert!(
                (g["funded_ratio"].as_f64().unwrap() - funded).abs() < 1e-12,
                "{name} shock {k}"
            );
        }
    }
}

/// The PDF's "Liabilities and funded status" section, read back by poppler's `pdftotext`: its title, the
/// funded ratio and the current portfolio's surplus CVaR as results.json gives them; an asset-only fund's
/// pack has no such section and its summary says none are configured.
#[test]
fn the_pack_has_a_liabilities_section_and_an_asset_only_pack_says_none_are_configured() {
    let f = Fixture::new();
    let cfg = fund_with_proxy(&f, false, "");
    let cfg = with_fund_value(&cfg, &f, &liabilities(1_050_000.0, "  duration: 14\n"));
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let text = super::common::squeeze(&super::common::pdf_text(&dir.join("pack.pdf")));
    assert!(text.contains("Liabilities and funded status"), "{text}");
    // The pack's one number format: two decimals and a percent sign (README, "The PDF pack").
    let funded = format!(
        "{:.2}%",
        r["liabilities"]["funded_ratio"].as_f64().unwrap() * 100.0
    );
    assert!(
        text.contains(&format!("Funded ratio (assets ÷ liabilities) {funded}")),
        "{funded}"
    );
    let cvar = r["liabilities"]["portfolios"]["current"]["surplus_cvar"]
        .as_f64()
        .unwrap();
    assert!(
        text.contains(&format!("surplus CVaR at 95% is {:.2}%", cvar * 100.0)),
        "{text}"
    );
    assert!(text.contains("Liabilities by proxy"), "the caveat");

    let g = Fixture::new();
    let cfg = fund_with_proxy(&g, false, "");
    let text = std::fs::read_to_string(&cfg).unwrap();
    // The asset-only fund: the proxy column goes, as a price column without a metadata row must.
    let prices = std::fs::read_to_string(g.path("data/prices.csv")).unwrap();
    let trimmed: String = prices
        .lines()
        .map(|l| l.rsplit_once(',').unwrap().0.to_string() + "\n")
        .collect();
    g.write("data/prices.csv", &trimmed);
    let cfg = g.write("fund.yaml", &text);
    let dir = run_pack(&g, &cfg);
    let text = super::common::squeeze(&super::common::pdf_text(&dir.join("pack.pdf")));
    assert!(!text.contains("Liabilities and funded status"));
    assert!(text.contains("Liabilities: none are configured"), "{text}");
    assert!(json(&dir.join("results.json"))["liabilities"].is_null());
}

/// The proxy has no metadata row, so `liabilities.tags` gives it tags: a stress move by one of them moves
/// the liabilities (the first matching tag move, as for an asset), a move naming the proxy beats it, and
/// a tag that neither an asset nor the proxy carries is refused naming the shock.
#[test]
fn a_stress_move_by_a_tag_of_the_proxy_moves_the_liabilities() {
    let f = Fixture::new();
    f.write(
        "stress.yaml",
        "shocks:\n  - name: Rates fall\n    moves:\n      - { tag: \"class:bond\", return: 0.04 }\n      - { tag: \"kind:pension\", return: 0.09 }\n      - { tag: \"kind:pension\", return: 0.5 }\n  - name: Named\n    moves:\n      - { tag: \"kind:pension\", return: 0.09 }\n      - { asset: LIAB, return: -0.03 }\n  - name: Untouched\n    moves:\n      - { tag: \"class:equity\", return: -0.2 }\n",
    );
    let cfg = fund_with_proxy(
        &f,
        false,
        "stress:\n  file: stress.yaml\n  historical_windows: 0\n",
    );
    let cfg = with_fund_value(
        &cfg,
        &f,
        &liabilities(1_050_000.0, "  tags: { Kind: Pension }\n"),
    );
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let moves: Vec<Option<f64>> = r["liabilities"]["stress_proxy_returns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m["proxy_return"].as_f64())
        .collect();
    assert_eq!(moves, [Some(0.09), Some(-0.03), None]);
    // The tag moved no asset: the bond and equity returns are those of their own moves.
    let rates_fall = &r["stress"]["shocks"][0]["returns"];
    assert_eq!(rates_fall["AS02"], 0.04);
    f.write(
        "stress.yaml",
        "shocks:\n  - name: Typo\n    moves:\n      - { tag: \"kind:pensoin\", return: 0.09 }\n",
    );
    let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet"]);
    assert_eq!(ran.code, 2, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("shock `Typo`")
            && ran
                .stderr
                .contains("tag `kind:pensoin` matches no asset and no tag of the liability proxy"),
        "{}",
        ran.stderr
    );
}

/// "Since the last pack" on the surplus basis: the decomposition's ends are each pack's own surplus CVaR
/// of its holdings (results.json's current risk profile, which is on the surplus basis), and the two
/// effects add up to the change; a pack whose previous one measured CVaR on the other basis gets no
/// decomposition and says why.
#[test]
fn the_change_since_the_last_pack_stays_on_the_surplus_basis() {
    let f = Fixture::new();
    let cfg = fund_with_proxy(&f, false, "risk:\n  basis: surplus\n");
    let cfg = with_fund_value(&cfg, &f, &liabilities(1_050_000.0, ""));
    let month = |as_of: &str| {
        let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet", "--as-of", as_of]);
        assert_eq!(ran.code, 0, "{}", ran.stderr);
        PathBuf::from(ran.stdout.lines().last().unwrap())
    };
    let cvar = |r: &serde_json::Value| {
        r["current"]["levels"]
            .as_array()
            .unwrap()
            .iter()
            .find(|t| t["level"] == 0.95)
            .unwrap()["cvar"]
            .as_f64()
            .unwrap()
    };
    let one = json(&month("2024-05-31").join("results.json"));
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.4\nAS02,0.3\nAS03,0.2\nAS04,0.1\n",
    );
    let second = month("2024-06-28");
    let two = json(&second.join("results.json"));
    // The pack names what it measures: the ratio's precondition and the tables are the surplus ones.
    let pre = two["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["id"] == "max_ratio.return_positive")
        .unwrap();
    assert!(
        pre["message"]
            .as_str()
            .unwrap()
            .contains("maximum expected surplus return"),
        "{pre}"
    );
    let text = super::common::squeeze(&super::common::pdf_text(&second.join("pack.pdf")));
    for words in [
        "Surplus CVaR 95%",
        "The current holdings' surplus CVaR 95% went from",
    ] {
        assert!(text.contains(words), "{words}");
    }
    // The ends are the packs' own surplus CVaR (recomputed from the scenario files in the first test).
    assert_eq!(one["liabilities"]["basis"], "surplus");
    let cv = &two["change"]["current_cvar"];
    assert_eq!(cv["basis"], "surplus", "{cv}");
    let (before, after) = (
        cv["before"].as_f64().unwrap(),
        cv["after"].as_f64().unwrap(),
    );
    assert!(
        (before - cvar(&one)).abs() < 1e-12,
        "{cv} against {}",
        cvar(&one)
    );
    assert!(
        (after - cvar(&two)).abs() < 1e-12,
        "{cv} against {}",
        cvar(&two)
    );
    let (h, m) = (
        cv["holdings_effect"].as_f64().unwrap(),
        cv["market_effect"].as_f64().unwrap(),
    );
    assert!((h + m - (after - before)).abs() < 1e-15, "{cv}");
    // The same fund switched to the assets' basis for a later revision of the second month.
    let text = std::fs::read_to_string(&cfg).unwrap();
    f.write(
        "fund.yaml",
        &text.replace("basis: surplus", "basis: assets"),
    );
    let three = json(&month("2024-06-28").join("results.json"));
    let ch = &three["change"];
    assert_eq!(ch["basis"]["before"], "surplus", "{ch}");
    assert_eq!(ch["basis"]["after"], "assets", "{ch}");
    assert!(ch["current_cvar"]["before"].is_null(), "{ch}");
    assert!(
        ch["current_cvar"]["note"]
            .as_str()
            .unwrap()
            .contains("not comparable"),
        "{ch}"
    );
}
