//! The policy portfolio: active risk against the policy benchmark by hand and recomputed from the pack's
//! scenario files, range breaches, the ranges as group limits, non-investable benchmark series kept out
//! of the universe, and a fund without a policy.
//!
//! Definitions the expected values come from, independently of the library: tracking error is the
//! standard deviation of active return (Grinold & Kahn, "Active Portfolio Management", 2nd ed. 2000,
//! ch. 3); CVaR_c of the active loss is min over ℓ of ℓ + 1/(1−c)·Σ p_k (L_k − ℓ)+ (Rockafellar & Uryasev
//! 2000, "Optimization of conditional value-at-risk", J. Risk 2(3), Theorem 1), which this file evaluates
//! at every scenario loss rather than by sorting.

use super::common::{Fixture, Market, config, json, pdf_text, portfolios, squeeze};
use std::path::PathBuf;
use tailpack::scenarios::{Column, ScenarioSet, mix_returns};

fn close(got: f64, want: f64, what: &str) {
    assert!((got - want).abs() < 1e-12, "{what}: {got} vs {want}");
}

#[test]
fn tracking_error_and_active_cvar_by_hand_on_three_assets_and_five_scenarios() {
    // Three assets, five equally likely scenarios (p = 0.2), portfolio x = (0.5, 0.3, 0.2).
    //            A      B      C       S (a non-investable series)
    //   s1     0.02   0.01   0.00    0.00
    //   s2    -0.04   0.00   0.01    0.00
    //   s3     0.06   0.02  -0.01    0.00
    //   s4    -0.10  -0.02   0.02    0.02
    //   s5     0.01   0.01   0.01    0.01
    // Benchmark: 0.5·A + 0.5·S, so b = (0.010, −0.020, 0.030, −0.040, 0.010).
    // r·x = (0.013, −0.018, 0.034, −0.052, 0.010); active a = r·x − b = (0.003, 0.002, 0.004, −0.012, 0).
    // Active return ā = −0.003/5 = −0.0006. Deviations (0.0036, 0.0026, 0.0046, −0.0114, 0.0006); squares
    // sum to 1.712e-4, so the tracking error is √(1.712e-4 / 5) = √3.424e-5.
    // Active losses −a = (−0.003, −0.002, −0.004, 0.012, 0): CVaR_0.8 is the worst scenario alone, 0.012;
    // CVaR_0.6 the mean of the worst two, 0.006; CVaR_0.7 = (0.2·0.012 + 0.1·0)/0.3 = 0.008.
    // Euler split at 0.7: tail weights 2/3 on s4 and 1/3 on s5 (the atom at VaR = 0 carries 0.1 of the
    // 0.3 tail). Portfolio side x_i·Σ q_k(−r_ki): A 0.5·(2/3·0.10 − 1/3·0.01) = 0.0316667, B
    // 0.3·(2/3·0.02 − 1/3·0.01) = 0.003, C 0.2·(−2/3·0.02 − 1/3·0.01) = −0.0033333; benchmark side
    // Σ q_k b_k = 2/3·(−0.04) + 1/3·0.01 = −0.0233333; together 0.008.
    let set = ScenarioSet::from_matrix(
        vec!["A".into(), "B".into(), "C".into()],
        vec![
            0.02, 0.01, 0.00, -0.04, 0.00, 0.01, 0.06, 0.02, -0.01, -0.10, -0.02, 0.02, 0.01, 0.01,
            0.01,
        ],
        vec![0.2; 5],
    )
    .unwrap();
    let reference = ScenarioSet::from_matrix(
        vec!["S".into()],
        vec![0.0, 0.0, 0.0, 0.02, 0.01],
        vec![0.2; 5],
    )
    .unwrap();
    let b = mix_returns(
        &set,
        &reference,
        &[(Column::Universe(0), 0.5), (Column::Reference(0), 0.5)],
    );
    for (got, want) in b.iter().zip([0.010, -0.020, 0.030, -0.040, 0.010]) {
        close(*got, want, "benchmark return");
    }
    let a = tailpack::risk::active(&set, &[0.5, 0.3, 0.2], &b, &[0.6, 0.7, 0.8], 0.7, 12.0);
    close(a.active_return, -0.0006, "active return");
    close(a.tracking_error, 3.424e-5f64.sqrt(), "tracking error");
    close(
        a.tracking_error_annualised,
        3.424e-5f64.sqrt() * 12f64.sqrt(),
        "annualised tracking error",
    );
    close(a.at(0.6).cvar, 0.006, "active CVaR 0.6");
    close(a.at(0.7).cvar, 0.008, "active CVaR 0.7");
    close(a.at(0.8).cvar, 0.012, "active CVaR 0.8");
    for (got, want) in a.component.iter().zip([0.095 / 3.0, 0.003, -0.01 / 3.0]) {
        close(*got, want, "Euler contribution");
    }
    close(a.benchmark_component, -0.07 / 3.0, "benchmark side");
}

/// A fund of four assets (two equity, two bond) whose price file also holds `REF-EQ`, a series without a
/// metadata row, and the config with `policy` appended.
fn fund_with_reference(f: &Fixture, policy: &str, gap: bool) -> PathBuf {
    let m = Market::new(4, "2022-01-03", "2024-06-28", 16);
    let mut csv = String::new();
    for (i, line) in m.wide_csv().lines().enumerate() {
        if i == 0 {
            csv.push_str(&format!("{line},REF-EQ\n"));
            continue;
        }
        let first: f64 = line.split(',').nth(1).unwrap().parse().unwrap();
        let third: f64 = line.split(',').nth(3).unwrap().parse().unwrap();
        let blank = gap && (400..406).contains(&i);
        let v = if blank {
            String::new()
        } else {
            format!("{:.6}", 0.4 * first + 0.7 * third + (i % 7) as f64 * 0.01)
        };
        csv.push_str(&format!("{line},{v}\n"));
    }
    f.write("data/prices.csv", &csv);
    f.write("data/assets.csv", &m.assets_csv());
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.25\nAS02,0.25\nAS03,0.25\nAS04,0.25\n",
    );
    f.write(
        "fund.yaml",
        &config(&format!(
            "analysis:\n  backtest_years: 0\n  daily_var_check: false\n{policy}"
        )),
    )
}

const POLICY: &str = "policy:\n  lines:\n    - { name: Equity, class: equity, target: 0.6, min: 0.55, max: 0.7, benchmark: REF-EQ }\n    - { name: Bonds, class: bond, target: 0.4, min: 0.3, max: 0.45, benchmark: AS02 }\n";

fn run_pack(f: &Fixture, cfg: &PathBuf) -> PathBuf {
    let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet"]);
    assert_eq!(ran.code, 0, "stderr: {}", ran.stderr);
    PathBuf::from(ran.stdout.lines().last().unwrap())
}

/// Columns of a CSV written by the pack: header names and rows of numbers after the label column.
fn table(path: &PathBuf) -> (Vec<String>, Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    let (mut labels, mut rows) = (vec![], vec![]);
    for l in lines {
        let mut cells = l.split(',');
        labels.push(cells.next().unwrap().to_string());
        rows.push(cells.map(|c| c.parse().unwrap()).collect());
    }
    (header[1..].to_vec(), labels, rows)
}

/// CVaR_c by the Rockafellar–Uryasev minimisation, F_c evaluated at every loss (the minimiser is one).
fn ru_cvar(losses: &[f64], c: f64) -> f64 {
    let p = 1.0 / losses.len() as f64;
    losses
        .iter()
        .map(|&l| l + losses.iter().map(|x| p * (x - l).max(0.0)).sum::<f64>() / (1.0 - c))
        .fold(f64::INFINITY, f64::min)
}

#[test]
fn active_risk_recomputed_from_the_scenario_files_for_every_portfolio() {
    let f = Fixture::new();
    let cfg = fund_with_reference(&f, POLICY, false);
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let (assets, labels, rows) = table(&dir.join("scenarios.csv"));
    let (series, ref_labels, ref_rows) = table(&dir.join("reference-scenarios.csv"));
    assert_eq!(
        assets,
        ["AS01", "AS02", "AS03", "AS04"],
        "scenarios.csv keeps only the universe"
    );
    assert_eq!(series, ["REF-EQ"]);
    assert_eq!(labels, ref_labels, "rows in the order of scenarios.csv");
    assert!(
        !std::fs::read_to_string(dir.join("weights.csv"))
            .unwrap()
            .contains("REF-EQ")
    );
    let manifest = std::fs::read_to_string(dir.join("manifest.json")).unwrap();
    assert!(manifest.contains("\"reference-scenarios.csv\""));
    let p = &r["policy"];
    assert_eq!(p["benchmark_weights"]["REF-EQ"], 0.6);
    assert_eq!(p["benchmark_weights"]["AS02"], 0.4);
    // b_k = Σ benchmark_weights × the series' return, each series a column of either file (the contract).
    let b: Vec<f64> = (0..rows.len())
        .map(|k| 0.6 * ref_rows[k][0] + 0.4 * rows[k][1])
        .collect();
    let portfolios = portfolios(&r, &assets);
    for (name, x) in &portfolios {
        let a: Vec<f64> = (0..rows.len())
            .map(|k| rows[k].iter().zip(x).map(|(r, w)| r * w).sum::<f64>() - b[k])
            .collect();
        let n = a.len() as f64;
        let mean = a.iter().sum::<f64>() / n;
        // Std of active return (Grinold & Kahn), as √(E[a²] − ā²) with equal probabilities.
        let te = (a.iter().map(|v| v * v).sum::<f64>() / n - mean * mean).sqrt();
        let got = &p["active"][name.as_str()];
        let tol = 1e-9;
        assert!(
            (got["active_return"].as_f64().unwrap() - mean).abs() < tol,
            "{name}"
        );
        assert!(
            (got["tracking_error"].as_f64().unwrap() - te).abs() < tol,
            "{name}: TE {got}"
        );
        let losses: Vec<f64> = a.iter().map(|v| -v).collect();
        for lv in got["levels"].as_array().unwrap() {
            let c = lv["level"].as_f64().unwrap();
            let want = ru_cvar(&losses, c);
            assert!(
                (lv["cvar"].as_f64().unwrap() - want).abs() < tol,
                "{name} at {c}"
            );
        }
        let cvar = got["active_cvar"].as_f64().unwrap();
        assert!((cvar - ru_cvar(&losses, 0.95)).abs() < tol);
        // The Euler split adds up to the active CVaR (positive homogeneity, Tasche 1999).
        let split: f64 = got["active_cvar_by_class"]
            .as_object()
            .unwrap()
            .values()
            .map(|v| v.as_f64().unwrap())
            .sum::<f64>()
            + got["active_cvar_benchmark"].as_f64().unwrap();
        assert!(
            (split - cvar).abs() < tol,
            "{name}: split {split} vs {cvar}"
        );
        // Exposure per line: Σ of the class's weights (AS01, AS03 equity; AS02, AS04 bond).
        let e = &p["portfolios"][name.as_str()]["exposure"];
        assert!(
            (e[0].as_f64().unwrap() - (x[0] + x[2])).abs() < tol,
            "{name}"
        );
        assert!(
            (e[1].as_f64().unwrap() - (x[1] + x[3])).abs() < tol,
            "{name}"
        );
    }
}

#[test]
fn a_range_breach_of_the_current_portfolio_is_a_warning_and_the_models_keep_the_ranges() {
    let f = Fixture::new();
    let cfg = fund_with_reference(&f, POLICY, false);
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    // Current: equity 0.25 + 0.25 = 0.5 < min 0.55; bonds 0.5 > max 0.45.
    assert_eq!(
        r["policy"]["portfolios"]["current"]["breaches"],
        serde_json::json!(["Equity", "Bonds"])
    );
    let check = r["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["id"] == "policy.current_ranges")
        .expect("range check");
    assert_eq!(check["level"], "warn");
    let msg = check["message"].as_str().unwrap();
    assert!(
        msg.contains("`Equity` at 50.00% (target 60.00%, range 55.00%–70.00%)"),
        "{msg}"
    );
    assert!(
        msg.contains("`Bonds` at 50.00% (target 40.00%, range 30.00%–45.00%)"),
        "{msg}"
    );
    for name in ["max_return", "min_cvar", "max_ratio"] {
        let m = &r["models"][name];
        if m["status"] != "optimal" {
            continue;
        }
        let w = &m["weights"];
        let equity = w["AS01"].as_f64().unwrap() + w["AS03"].as_f64().unwrap();
        assert!(
            (0.55 - 1e-7..=0.7 + 1e-7).contains(&equity),
            "{name}: equity {equity}"
        );
        assert_eq!(
            r["policy"]["portfolios"][name]["breaches"],
            serde_json::json!([])
        );
    }
}

#[test]
fn policy_ranges_stay_out_of_the_models_when_switched_off() {
    let f = Fixture::new();
    let off = POLICY.replace("policy:\n", "policy:\n  ranges_as_limits: false\n");
    let cfg = fund_with_reference(&f, &off, false);
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    assert_eq!(r["constraints"]["groups"], serde_json::json!([]));
    assert_eq!(r["policy"]["ranges_as_limits"], false);
    // The policy page says the ranges are for comparison only; with them on, that they bind the models.
    let said = |dir: &PathBuf| squeeze(&pdf_text(&dir.join("pack.pdf")));
    let text = said(&dir);
    assert!(
        text.contains("The policy ranges do not bind the models (ranges_as_limits is off)"),
        "the page must say the ranges do not bind the models"
    );
    let on = Fixture::new();
    let cfg = fund_with_reference(&on, POLICY, false);
    let dir = run_pack(&on, &cfg);
    let r = json(&dir.join("results.json"));
    assert!(
        said(&dir).contains("The policy ranges bind the models"),
        "the page must say the ranges bind the models"
    );
    let names: Vec<&str> = r["constraints"]["groups"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| g["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["policy: Equity", "policy: Bonds"]);
}

#[test]
fn a_gap_in_a_benchmark_series_names_the_series_and_the_date() {
    let f = Fixture::new();
    let cfg = fund_with_reference(&f, POLICY, true);
    let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet"]);
    assert_eq!(ran.code, 3, "stderr: {}", ran.stderr);
    // Rows 400–405 of the file are blank; with quality.max_fill = 3 the fourth blank cannot be filled.
    let m = Market::new(4, "2022-01-03", "2024-06-28", 16);
    let date = m.dates[402].to_string();
    assert!(
        ran.stderr.contains("benchmark series `REF-EQ`"),
        "{}",
        ran.stderr
    );
    assert!(
        ran.stderr.contains(&format!("no price on {date}")),
        "{}",
        ran.stderr
    );
}

#[test]
fn without_a_policy_there_is_no_policy_block_and_a_note_says_so() {
    let f = Fixture::new();
    let m = Market::new(3, "2022-01-03", "2024-06-28", 7);
    let cfg = f.small_fund(&m, &config("analysis:\n  backtest_years: 0\n"));
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    assert!(r["policy"].is_null());
    assert!(!dir.join("reference-scenarios.csv").exists());
    assert!(
        r["checks"]
            .as_array()
            .unwrap()
            .iter()
            .any(|c| c["id"] == "policy.not_configured")
    );
    // The pack keeps its policy page and says plainly that there is no policy.
    let text = squeeze(&pdf_text(&dir.join("pack.pdf")));
    assert!(
        text.contains("2 Position against policy"),
        "the policy page must be there"
    );
    assert!(
        text.contains("No policy portfolio is configured for this fund (config section `policy`)"),
        "the page must say no policy is configured"
    );
    assert!(
        !text.contains("Active risk against the policy benchmark"),
        "no active-risk table without a policy"
    );
}

#[test]
fn a_price_column_without_metadata_is_still_refused_unless_the_policy_names_it() {
    let f = Fixture::new();
    let cfg = fund_with_reference(&f, "", false);
    let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet"]);
    assert_eq!(ran.code, 3, "stderr: {}", ran.stderr);
    assert!(
        ran.stderr.contains("no row for asset `REF-EQ`"),
        "{}",
        ran.stderr
    );
}

#[test]
fn a_non_investable_series_cannot_be_excluded_as_an_asset() {
    let f = Fixture::new();
    let policy = format!("limits:\n  exclude: [REF-EQ]\n{POLICY}");
    let cfg = fund_with_reference(&f, &policy, false);
    let ran = f.run(&["run", cfg.to_str().unwrap(), "--quiet"]);
    assert_eq!(ran.code, 2, "stderr: {}", ran.stderr);
    assert!(
        ran.stderr
            .contains("limits.exclude: unknown asset `REF-EQ`"),
        "{}",
        ran.stderr
    );
}

#[test]
fn tracking_error_uses_the_scenario_probabilities() {
    // With decaying probabilities (scenarios.half_life), scenarios.csv gains a probability column and the
    // tracking error is √Σ p_k (a_k − ā)² with those p_k (Grinold & Kahn's standard deviation, weighted).
    let f = Fixture::new();
    let cfg = fund_with_reference(&f, POLICY, false);
    let text = std::fs::read_to_string(&cfg).unwrap();
    f.write(
        "fund.yaml",
        &text.replace("  horizon: 5\n", "  horizon: 5\n  half_life: 60\n"),
    );
    let dir = run_pack(&f, &cfg);
    let r = json(&dir.join("results.json"));
    let (cols, _, rows) = table(&dir.join("scenarios.csv"));
    let (_, _, ref_rows) = table(&dir.join("reference-scenarios.csv"));
    assert_eq!(cols[0], "probability");
    let x = [0.25; 4];
    let a: Vec<(f64, f64)> = rows
        .iter()
        .zip(&ref_rows)
        .map(|(row, s)| {
            let rx: f64 = row[1..].iter().zip(&x).map(|(r, w)| r * w).sum();
            (row[0], rx - (0.6 * s[0] + 0.4 * row[2]))
        })
        .collect();
    let mean: f64 = a.iter().map(|(p, v)| p * v).sum();
    let te = a
        .iter()
        .map(|(p, v)| p * (v - mean).powi(2))
        .sum::<f64>()
        .sqrt();
    let got = r["policy"]["active"]["current"]["tracking_error"]
        .as_f64()
        .unwrap();
    assert!((got - te).abs() < 1e-9, "{got} vs {te}");
    let equal = (a.iter().map(|(_, v)| v * v).sum::<f64>() / a.len() as f64
        - (a.iter().map(|(_, v)| v).sum::<f64>() / a.len() as f64).powi(2))
    .sqrt();
    assert!(
        (te - equal).abs() > 1e-7,
        "the weighting must matter in this test"
    );
}

/// The active CVaR at 95% of weights `x` against the policy benchmark of [`POLICY`], recomputed from the
/// pack's scenario files: b_k = 0.6 × REF-EQ + 0.4 × AS02 (the contract), CVaR of the active loss by
/// [`ru_cvar`] (Rockafellar & Uryasev 2000, Theorem 1).
fn active_cvar_from_files(dir: &std::path::Path, x: &[f64]) -> f64 {
    let (_, _, rows) = table(&dir.join("scenarios.csv"));
    let (_, _, ref_rows) = table(&dir.join("reference-scenarios.csv"));
    let losses: Vec<f64> = (0..rows.len())
        .map(|k| {
            let b = 0.6 * ref_rows[k][0] + 0.4 * rows[k][1];
            b - rows[k].iter().zip(x).map(|(r, w)| r * w).sum::<f64>()
        })
        .collect();
    ru_cvar(&losses, 0.95)
}

/// Each optimal model's weights in asset order, by name.
fn model_weights(r: &serde_json::Value) -> Vec<(String, Vec<f64>)> {
    r["models"]
        .as_object()
        .unwrap()
        .iter()
        .filter_map(|(name, m)| {
            let w = m["weights"].as_object()?;
            let x = ["AS01", "AS02", "AS03", "AS04"].map(|a| w[a].as_f64().unwrap());
            Some((name.clone(), x.to_vec()))
        })
        .collect()
}

/// Issue 16: `policy.active_cvar_budget` binds. Without a budget the max-return model has some active CVaR
/// A; with the budget 0.8·A every model's active CVaR, recomputed from scenarios.csv and
/// reference-scenarios.csv, is within the budget and the max-return model's sits on it, with a lower
/// expected return than under a budget of 2·A, which does not bind and gives the unbudgeted portfolio.
#[test]
fn an_active_cvar_budget_binds_the_models_and_a_looser_one_earns_more() {
    let f = Fixture::new();
    let free = run_pack(&f, &fund_with_reference(&f, POLICY, false));
    let r = json(&free.join("results.json"));
    let a = r["policy"]["active"]["max_return"]["active_cvar"]
        .as_f64()
        .unwrap();
    assert!(r["policy"]["active_cvar_budget"].is_null());
    let with = |budget: f64| {
        let policy = POLICY.replace(
            "policy:\n",
            &format!("policy:\n  active_cvar_budget: {budget}\n"),
        );
        let f = Fixture::new();
        let dir = run_pack(&f, &fund_with_reference(&f, &policy, false));
        (json(&dir.join("results.json")), dir, f)
    };
    let tight = 0.8 * a;
    let (rt, dir_t, _keep_t) = with(tight);
    assert_eq!(rt["policy"]["active_cvar_budget"].as_f64(), Some(tight));
    let models = model_weights(&rt);
    assert_eq!(models.len(), 3, "every model is optimal: {}", rt["models"]);
    for (name, x) in &models {
        let active = active_cvar_from_files(&dir_t, x);
        assert!(
            active <= tight + 1e-7,
            "{name}: active CVaR {active} over the budget {tight}"
        );
        if name == "max_return" {
            assert!(
                active >= tight - 1e-6,
                "the budget binds max_return: {active} vs {tight}"
            );
        }
    }
    let checks = rt["checks"].to_string();
    assert!(checks.contains("policy.active_cvar_budget"), "{checks}");
    let (rl, _dir_l, _keep_l) = with(2.0 * a);
    let ret = |r: &serde_json::Value| {
        r["models"]["max_return"]["expected_return"]
            .as_f64()
            .unwrap()
    };
    assert!(
        ret(&rl) > ret(&rt) + 1e-6,
        "a looser budget earns more: {} vs {}",
        ret(&rl),
        ret(&rt)
    );
    close_to(
        ret(&rl),
        ret(&r),
        1e-9,
        "a budget that does not bind changes nothing",
    );
}

fn close_to(got: f64, want: f64, tol: f64, what: &str) {
    assert!((got - want).abs() <= tol, "{what}: {got} vs {want}");
}

/// A budget below the least active CVaR the limits allow leaves no portfolio: every family is infeasible
/// with a message naming the budget and that minimum, established by the LP of the minimum active CVaR.
#[test]
fn a_budget_below_the_least_active_cvar_empties_the_set_and_says_so() {
    let f = Fixture::new();
    let policy = POLICY.replace("policy:\n", "policy:\n  active_cvar_budget: 0\n");
    let dir = run_pack(&f, &fund_with_reference(&f, &policy, false));
    let r = json(&dir.join("results.json"));
    for (name, m) in r["models"].as_object().unwrap() {
        assert_eq!(m["status"], "infeasible", "{name}: {m}");
        let msg = m["message"].as_str().unwrap();
        assert!(
            msg.contains("policy.active_cvar_budget: the active-CVaR budget 0.000000 is below the minimum active CVaR"),
            "{name}: {msg}"
        );
    }
}

/// The backtest's realised (ex-post) tracking error, recomputed here from the price file and the months
/// in results.json: the benchmark's return over each month is Σ target × (P[next]/P[date] − 1) of its
/// series (the definition of the policy benchmark), active return is the month's realised return
/// net of costs minus it, and the tracking error is the sample standard deviation of active returns
/// (Grinold & Kahn, "Active Portfolio Management", ch. 3), annualised by √12 for monthly observations.
#[test]
fn backtest_ex_post_tracking_error_from_the_price_file() {
    let f = Fixture::new();
    let cfg = fund_with_reference(&f, POLICY, false);
    let text = std::fs::read_to_string(&cfg)
        .unwrap()
        .replace("backtest_years: 0", "backtest_years: 1");
    f.write("fund.yaml", &text);
    let pack = run_pack(&f, &cfg);
    let r = json(&pack.join("results.json"));
    let prices = std::fs::read_to_string(f.path("data/prices.csv")).unwrap();
    let mut lines = prices.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (eq, bond) = (col("REF-EQ"), col("AS02"));
    let rows: std::collections::HashMap<String, Vec<f64>> = lines
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            let values = cells[1..].iter().map(|c| c.parse().unwrap_or(f64::NAN));
            (
                cells[0].to_string(),
                std::iter::once(f64::NAN).chain(values).collect(),
            )
        })
        .collect();
    let bench = |date: &str, next: &str| {
        let (a, b) = (&rows[date], &rows[next]);
        0.6 * (b[eq] / a[eq] - 1.0) + 0.4 * (b[bond] / a[bond] - 1.0)
    };
    let words = pdf_text(&pack.join("pack.pdf"));
    let mut checked = 0;
    for (model, t) in r["backtest"]["models"].as_object().unwrap() {
        let active: Vec<f64> = t["months"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|m| !m["realised_return_net"].is_null())
            .map(|m| {
                m["realised_return_net"].as_f64().unwrap()
                    - bench(m["date"].as_str().unwrap(), m["next"].as_str().unwrap())
            })
            .collect();
        assert!(active.len() >= 10, "{model}: {} months", active.len());
        let n = active.len() as f64;
        let mean = active.iter().sum::<f64>() / n;
        let te = (active.iter().map(|a| (a - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let e = &t["ex_post_active"];
        assert_eq!(e["months"].as_u64(), Some(active.len() as u64), "{model}");
        close(
            e["mean_active_return"].as_f64().unwrap(),
            mean,
            "mean active",
        );
        assert!(
            (e["tracking_error"].as_f64().unwrap() - te).abs() < 1e-12,
            "{model}: {e} vs {te}"
        );
        let annual = te * 12f64.sqrt();
        assert!((e["tracking_error_annualised"].as_f64().unwrap() - annual).abs() < 1e-12);
        let printed = format!("{:.2}%", annual * 100.0);
        assert!(
            words.contains(&printed),
            "{model}: {printed} not in the PDF"
        );
        checked += 1;
    }
    assert_eq!(checked, 3);
    assert!(words.contains("Tracking error, annualised"), "{words}");
}

/// The walk-forward backtest's monthly models keep the active-CVaR budget too. Each month's window is
/// rebuilt here from the price file alone: rows dated from two years before the month-end up to it,
/// scenarios r_k = P[k+5]/P[k] − 1 on every row (horizon 5, step 1, equal probabilities), the benchmark
/// 0.6·REF-EQ + 0.4·AS02, and the active CVaR_0.95 of each month's weights by the Rockafellar & Uryasev
/// minimisation; it must be within the budget. The same budget on the bands' resamples leaves them solved.
#[test]
fn the_backtest_and_the_bands_keep_the_active_cvar_budget() {
    let f = Fixture::new();
    let free = run_pack(&f, &fund_with_reference(&f, POLICY, false));
    let a = json(&free.join("results.json"))["policy"]["active"]["max_return"]["active_cvar"]
        .as_f64()
        .unwrap();
    let budget = 0.8 * a;
    let g = Fixture::new();
    let policy = POLICY.replace(
        "policy:\n",
        &format!("policy:\n  active_cvar_budget: {budget}\n"),
    );
    let cfg = fund_with_reference(&g, &policy, false);
    let text = std::fs::read_to_string(&cfg).unwrap().replace(
        "backtest_years: 0",
        "backtest_years: 1\n  band_resamples: 6",
    );
    g.write("fund.yaml", &text);
    let r = json(&run_pack(&g, &cfg).join("results.json"));
    let prices = std::fs::read_to_string(g.path("data/prices.csv")).unwrap();
    let mut lines = prices.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let assets = ["AS01", "AS02", "AS03", "AS04"].map(col);
    let (eq, bond) = (col("REF-EQ"), col("AS02"));
    let rows: Vec<(chrono::NaiveDate, Vec<f64>)> = lines
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            let values = cells
                .iter()
                .map(|c| c.parse().unwrap_or(f64::NAN))
                .collect();
            (cells[0].parse().unwrap(), values)
        })
        .collect();
    let mut months = 0;
    for (model, t) in r["backtest"]["models"].as_object().unwrap() {
        for m in t["months"].as_array().unwrap() {
            let Some(w) = m["weights"].as_object() else {
                continue;
            };
            let x = ["AS01", "AS02", "AS03", "AS04"].map(|a| w[a].as_f64().unwrap());
            let end: chrono::NaiveDate = m["date"].as_str().unwrap().parse().unwrap();
            let from = end.checked_sub_months(chrono::Months::new(24)).unwrap();
            let window: Vec<&Vec<f64>> = rows
                .iter()
                .filter(|(d, _)| *d >= from && *d <= end)
                .map(|(_, v)| v)
                .collect();
            let losses: Vec<f64> = (5..window.len())
                .map(|k| {
                    let ret = |c: usize| window[k][c] / window[k - 5][c] - 1.0;
                    let b = 0.6 * ret(eq) + 0.4 * ret(bond);
                    b - assets.iter().zip(&x).map(|(&c, w)| ret(c) * w).sum::<f64>()
                })
                .collect();
            let active = ru_cvar(&losses, 0.95);
            assert!(
                active <= budget + 1e-7,
                "{model} on {end}: active CVaR {active} over the budget {budget}"
            );
            months += 1;
        }
    }
    assert!(months >= 30, "{months} model-months checked");
    let bands = &r["bands"]["models"]["max_return"];
    assert!(bands["solved"].as_u64().unwrap() >= 1, "{bands}");
}
