//! Issue 16, money and transaction costs in the pack: `fund_value`, `base_currency`, `costs.rates`, each
//! model's `cost` and `expected_return_net`, and `trades`, recomputed here from `weights.csv` and the
//! config's own figures (cost of a trade list = Σ rate_i × |x_i − current_i| × value, the definition of
//! issue 16; a trade = value × weight change).

use super::common::{Fixture, Market, json, weights_csv};
use serde_json::Value;
use std::collections::BTreeMap;
use std::path::PathBuf;

const VALUE: f64 = 750_000_000.0;

/// A four-asset fund (AS01, AS03 equity; AS02, AS04 bond) with a value, a currency and cost rates:
/// equity 20 bp, bond 8 bp, AS04 its own 35 bp. `fund` is the `fund:` section's extra lines.
fn costed_fund(f: &Fixture, fund: &str, holdings: bool) -> PathBuf {
    let m = Market::new(4, "2021-01-01", "2024-06-28", 41);
    let holdings_line = if holdings {
        "  holdings: data/holdings.csv\n"
    } else {
        ""
    };
    let config = format!(
        "fund:\n  name: Cost Test Fund (fictional)\n{fund}data:\n  prices: data/prices.csv\n  assets: data/assets.csv\n{holdings_line}scenarios:\n  horizon: 5\n  lookback_years: 2\nmodels:\n  max_return:\n    cvar_cap: {{ times_min: 1.5 }}\n  min_cvar:\n    return_floor: {{ value: 0.0 }}\ncosts:\n  class_bps: {{ equity: 20, bond: 8 }}\n  asset_bps: {{ AS04: 35 }}\nanalysis:\n  frontier_points: 2\n  backtest_years: 0\n  daily_var_check: false\noutput:\n  root: out\n"
    );
    f.small_fund(&m, &config);
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.4\nAS02,0.3\nAS03,0.2\nAS04,0.1\n",
    )
}

/// The rates the config above gives, as fractions (basis points / 10,000), an asset's own beating its class's.
fn config_rates() -> BTreeMap<&'static str, f64> {
    BTreeMap::from([
        ("AS01", 0.0020),
        ("AS02", 0.0008),
        ("AS03", 0.0020),
        ("AS04", 0.0035),
    ])
}

/// The PDF's text with words rejoined where a line break hyphenated them and whitespace squeezed.
fn pdf_words(pack: &std::path::Path) -> String {
    let text = super::common::pdf_text(&pack.join("pack.pdf"));
    let joined = text
        .lines()
        .map(str::trim)
        .collect::<Vec<_>>()
        .join("\n")
        .replace("-\n", "");
    joined.split_whitespace().collect::<Vec<_>>().join(" ")
}

fn run(f: &Fixture) -> (Value, PathBuf) {
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = PathBuf::from(ran.stdout.lines().last().unwrap());
    (json(&pack.join("results.json")), pack)
}

#[test]
fn trades_and_costs_follow_from_the_weights_and_the_config() {
    let f = Fixture::new();
    costed_fund(
        &f,
        &format!("  value: {VALUE}\n  base_currency: XTS\n"),
        true,
    );
    let (r, pack) = run(&f);
    let words = pdf_words(&pack);
    assert!(
        words.contains("The models and the backtest charge the configured"),
        "the caveat says costs are charged: {words}"
    );
    assert!(!words.contains("include no transaction costs"), "{words}");
    // The ratio's precondition is checked on the returns the models maximise: net of costs.
    let pre = r["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["id"] == "max_ratio.return_positive")
        .expect("the ratio's return precondition is a check");
    assert!(
        pre["message"]
            .as_str()
            .unwrap()
            .contains("maximum expected return net of transaction costs"),
        "{pre}"
    );
    assert_eq!(r["fund_value"].as_f64(), Some(VALUE));
    assert_eq!(r["base_currency"], "XTS");
    let rates = config_rates();
    for (a, rate) in &rates {
        let got = r["costs"]["rates"][a].as_f64().unwrap();
        assert!(
            (got - rate).abs() < 1e-15,
            "{a}: rate {got} vs config {rate}"
        );
    }
    let w = weights_csv(&pack);
    let current = &w["current"];
    let mut models = 0;
    let mut traded = 0;
    for (name, m) in r["models"].as_object().unwrap() {
        if m["status"] != "optimal" {
            continue;
        }
        models += 1;
        let x = &w[name.as_str()];
        let trades = r["trades"][name].as_object().unwrap();
        let mut sum = 0.0;
        let mut gross = 0.0;
        let mut cost = 0.0;
        for (a, rate) in &rates {
            let dw = x[*a] - current[*a];
            cost += rate * dw.abs();
            match trades.get(*a) {
                Some(t) => {
                    let t = t.as_f64().unwrap();
                    assert!(
                        (t - VALUE * dw).abs() <= 1e-6,
                        "{name} {a}: trade {t} vs value × Δw {}",
                        VALUE * dw
                    );
                    sum += t;
                    gross += t.abs();
                }
                None => assert!(dw.abs() <= 1e-9, "{name} {a}: Δw {dw} but no trade listed"),
            }
        }
        traded += usize::from(gross > 0.0);
        assert!(sum.abs() <= 1e-3, "{name}: trades sum to {sum}");
        let reported = m["cost"].as_f64().unwrap();
        assert!(
            (reported - cost).abs() <= 1e-12,
            "{name}: cost {reported} vs Σ rate × |Δw| = {cost}"
        );
        assert!(
            (reported * VALUE - cost * VALUE).abs() <= 1e-3,
            "{name}: cost in money"
        );
        let gross_return = m["expected_return"].as_f64().unwrap();
        let net = m["expected_return_net"].as_f64().unwrap();
        assert!(
            (net - (gross_return - cost)).abs() <= 1e-12,
            "{name}: net {net} vs gross {gross_return} − cost {cost}"
        );
    }
    assert_eq!(models, 3, "every model has a portfolio");
    assert!(
        traded > 0,
        "some model trades, so the trade lists are exercised"
    );
}

#[test]
fn without_a_fund_value_money_fields_are_null_and_a_note_says_so() {
    let f = Fixture::new();
    costed_fund(&f, "", true);
    let (r, _) = run(&f);
    assert!(r["fund_value"].is_null());
    assert!(r["base_currency"].is_null());
    assert!(r["trades"].is_null());
    // Fractions are still there: the costs do not need a value.
    assert!(r["models"]["max_return"]["cost"].as_f64().unwrap() > 0.0);
    let checks = r["checks"].as_array().unwrap();
    assert!(
        checks.iter().any(
            |c| c["id"] == "fund.value" && c["message"].as_str().unwrap().contains("not shown")
        )
    );
}

#[test]
fn without_holdings_nothing_is_charged_and_a_check_says_so() {
    let f = Fixture::new();
    costed_fund(
        &f,
        &format!("  value: {VALUE}\n  base_currency: XTS\n"),
        false,
    );
    let (r, pack) = run(&f);
    assert!(
        pdf_words(&pack).contains("without current holdings the models charge none"),
        "the caveat says why nothing is charged"
    );
    assert!(r["trades"].is_null());
    for m in r["models"].as_object().unwrap().values() {
        if m["status"] == "optimal" {
            assert_eq!(m["cost"].as_f64(), Some(0.0));
            assert_eq!(m["expected_return_net"], m["expected_return"]);
        }
    }
    let checks = r["checks"].as_array().unwrap();
    assert!(
        checks
            .iter()
            .any(|c| c["id"] == "costs.no_holdings" && c["level"] == "warn"),
        "{checks:?}"
    );
}

/// Issue 16: the walk-forward backtest pays each month's rebalance cost, Σ rate × |w − drifted w|, from the
/// wealth, recomputed here from the prices file, the months' weights and the config's rates: the drifted
/// weight of asset i after a month is w_i (1 + r_i) / (1 + r_p), r_i = P(next)/P(date) − 1.
#[test]
fn the_backtest_charges_each_rebalance_from_the_drifted_weights() {
    let f = Fixture::new();
    costed_fund(
        &f,
        &format!("  value: {VALUE}\n  base_currency: XTS\n"),
        true,
    );
    let text = std::fs::read_to_string(f.path("fund.yaml")).unwrap();
    f.write(
        "fund.yaml",
        &text.replace("backtest_years: 0", "backtest_years: 1"),
    );
    let (r, pack) = run(&f);
    let words = pdf_words(&pack);
    assert!(
        words.contains("net of each month") && !words.contains("before costs (no transaction"),
        "the backtest's wealth is labelled net of costs: {words}"
    );
    assert!(
        words.contains("before costs, predicted and realised alike"),
        "the mean returns are labelled gross: {words}"
    );
    let prices = std::fs::read_to_string(f.path("data/prices.csv")).unwrap();
    let mut lines = prices.lines();
    let assets: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .skip(1)
        .map(String::from)
        .collect();
    let by_date: BTreeMap<String, Vec<f64>> = lines
        .map(|l| {
            let mut cells = l.split(',');
            let d = cells.next().unwrap().to_string();
            (d, cells.map(|c| c.parse().unwrap()).collect())
        })
        .collect();
    let rates = config_rates();
    let rate: Vec<f64> = assets.iter().map(|a| rates[a.as_str()]).collect();
    let mut charged = 0;
    for (name, t) in r["backtest"]["models"].as_object().unwrap() {
        let mut held: Vec<f64> = vec![0.4, 0.3, 0.2, 0.1];
        let (mut wealth, mut total) = (1.0, 0.0);
        for m in t["months"].as_array().unwrap() {
            if m["weights"].is_null() {
                continue;
            }
            let w: Vec<f64> = assets
                .iter()
                .map(|a| m["weights"][a].as_f64().unwrap())
                .collect();
            let cost: f64 = (0..w.len()).map(|i| rate[i] * (w[i] - held[i]).abs()).sum();
            let got = m["cost"].as_f64().unwrap();
            assert!(
                (got - cost).abs() <= 1e-12,
                "{name} {}: cost {got} vs {cost}",
                m["date"]
            );
            let (p0, p1) = (
                &by_date[m["date"].as_str().unwrap()],
                &by_date[m["next"].as_str().unwrap()],
            );
            let r_i: Vec<f64> = (0..w.len()).map(|i| p1[i] / p0[i] - 1.0).collect();
            let rp: f64 = (0..w.len()).map(|i| w[i] * r_i[i]).sum();
            total += cost * wealth;
            wealth *= (1.0 - cost) * (1.0 + rp);
            let net = m["realised_return_net"].as_f64().unwrap();
            assert!(
                (net - ((1.0 - cost) * (1.0 + rp) - 1.0)).abs() <= 1e-12,
                "{name}: net return"
            );
            assert!(
                (m["wealth"].as_f64().unwrap() - wealth).abs() <= 1e-12,
                "{name}: wealth net of costs"
            );
            held = (0..w.len())
                .map(|i| w[i] * (1.0 + r_i[i]) / (1.0 + rp))
                .collect();
            charged += usize::from(cost > 0.0);
        }
        let paid = t["total_cost"].as_f64().unwrap();
        assert!(
            (paid - total).abs() <= 1e-12,
            "{name}: total cost {paid} vs {total}"
        );
        assert!((t["final_wealth"].as_f64().unwrap() - wealth).abs() <= 1e-12);
    }
    assert!(charged > 10, "rebalances pay costs");
}

/// In a multi-fund config each fund may bring its own value, policy and cost rates; a fund that gives
/// none keeps the shared ones. The rates and policy lines in each pack's results.json are the ones its
/// own config section gives (the README's "Several funds" rule), checked against the config text.
#[test]
fn each_fund_of_a_multi_fund_config_has_its_own_policy_value_and_costs() {
    let f = Fixture::new();
    costed_fund(&f, "", true);
    let shared = std::fs::read_to_string(f.path("fund.yaml")).unwrap();
    let funds = "funds:\n  - fund: { name: Shared Mandate (fictional), short_name: shared }\n  - fund: { name: Own Mandate (fictional), short_name: own, value: 40000000, base_currency: XTS }\n    costs:\n      class_bps: { equity: 50 }\n    policy:\n      lines:\n        - { name: Equity, class: equity, target: 0.5, min: 0.2, max: 0.8, benchmark: AS01 }\n        - { name: Bonds, class: bond, target: 0.5, min: 0.2, max: 0.8, benchmark: AS02 }\n";
    f.write("fund.yaml", &format!("{shared}{funds}"));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = |short: &str| json(&f.path(&format!("out/{short}/2024-06-28/r1/results.json")));
    let (shared, own) = (pack("shared"), pack("own"));
    for (a, rate) in config_rates() {
        let got = shared["costs"]["rates"][a].as_f64().unwrap();
        assert!((got - rate).abs() < 1e-15, "shared {a}: {got} vs {rate}");
    }
    // Own rates: equity 50 bp from the fund's section; bonds none (its `costs` replaces the shared one).
    let own_rates = [
        ("AS01", 0.005),
        ("AS02", 0.0),
        ("AS03", 0.005),
        ("AS04", 0.0),
    ];
    for (a, rate) in own_rates {
        let got = own["costs"]["rates"][a].as_f64().unwrap();
        assert!((got - rate).abs() < 1e-15, "own {a}: {got} vs {rate}");
    }
    assert!(shared["fund_value"].is_null(), "{}", shared["fund_value"]);
    assert_eq!(own["fund_value"].as_f64(), Some(40_000_000.0));
    assert_eq!(own["base_currency"], "XTS");
    assert!(shared["policy"].is_null(), "{}", shared["policy"]);
    let lines = own["policy"]["lines"].as_array().unwrap();
    let names: Vec<&str> = lines.iter().map(|l| l["name"].as_str().unwrap()).collect();
    assert_eq!(names, ["Equity", "Bonds"]);
    assert_eq!(lines[0]["target"].as_f64(), Some(0.5));
}
