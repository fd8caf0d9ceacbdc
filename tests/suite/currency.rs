//! Issue 18, several currencies: prices in a foreign currency are converted to the base currency with the
//! fund's exchange rates before scenarios are built, hedged or not; stress shocks move currencies; results
//! record each asset's currency and hedge ratio and every portfolio's exposure per currency.
//!
//! The expected returns are computed here from the input files the run reads, by the parity relations of
//! international investment (Solnik & McLeavey, International Investments, "Foreign exchange parity
//! relations"): an unhedged foreign asset returns (1 + r_local)(1 + r_fx) − 1 in the base currency, a fully
//! hedged one at a zero interest rate differential its local return r_local, and a partly hedged one with
//! the hedge reset every observation compounds h·(r_local + f) + (1 − h)·((1 + r_local)(1 + r_fx) − 1).

use super::common::{Fixture, Market, config, json};
use chrono::NaiveDate;
use rand::SeedableRng;

/// Rates of two invented currencies on the market's dates, every seventh date left out (the rate feed
/// keeps a calendar of its own), as a wide file, and the rates themselves by date.
fn rates(m: &Market) -> (String, Vec<(NaiveDate, [f64; 2])>) {
    let mut rng = rand::rngs::StdRng::seed_from_u64(1818);
    let mut x = [1.25, 0.07];
    let mut quoted = vec![];
    let mut text = String::from("date,QMV,QRD\n");
    for (i, d) in m.dates.iter().enumerate() {
        x[0] *= 1.0 + 0.006 * super::common::normal(&mut rng);
        x[1] *= 1.0 + 0.009 * super::common::normal(&mut rng);
        if i % 7 == 3 {
            continue;
        }
        let rounded = [round6(x[0]), round6(x[1])];
        text.push_str(&format!("{d},{:.6},{:.6}\n", rounded[0], rounded[1]));
        quoted.push((*d, rounded));
    }
    (text, quoted)
}

fn round6(v: f64) -> f64 {
    (v * 1e6).round() / 1e6
}

/// The latest quoted rate on or before `d` (never a later one).
fn rate_on(quoted: &[(NaiveDate, [f64; 2])], d: NaiveDate, k: usize) -> f64 {
    quoted
        .iter()
        .rev()
        .find(|(q, _)| *q <= d)
        .expect("a rate")
        .1[k]
}

/// Prices as the run reads them back from the wide CSV (six decimals).
fn price_on(m: &Market, d: NaiveDate, asset: usize) -> f64 {
    let r = m.dates.iter().position(|x| *x == d).expect("a price date");
    round6(m.prices[r][asset])
}

/// Three assets: AS01 equity in the base currency, AS02 bond in QMV, AS03 equity in QRD; `currency` is
/// the config's `currency` section.
fn fund(currency: &str, stress: bool) -> (Fixture, Market, Vec<(NaiveDate, [f64; 2])>) {
    let f = Fixture::new();
    let m = Market::new(3, "2023-01-02", "2024-06-28", 77);
    let (text, quoted) = rates(&m);
    let stress_key = if stress {
        "stress:\n  file: shocks.yaml\n"
    } else {
        ""
    };
    let cfg = config(&format!(
        "analysis:\n  backtest_years: 0\n  daily_var_check: false\n  frontier_points: 3\n  band_resamples: 0\n{stress_key}{currency}"
    ))
    .replace("  name: Test Fund (fictional)\n", "  name: Test Fund (fictional)\n  base_currency: XTS\n")
    .replace("  holdings: data/holdings.csv\n", "  holdings: data/holdings.csv\n  fx: data/rates.csv\n");
    f.small_fund(&m, &cfg);
    f.write(
        "data/assets.csv",
        "asset,class,max_weight,currency\nAS01,equity,0.6,\nAS02,bond,0.6,QMV\nAS03,equity,0.6,QRD\n",
    );
    f.write("data/rates.csv", &text);
    f.write(
        "shocks.yaml",
        "shocks:\n  - name: Devaluation\n    moves:\n      - { tag: \"currency:QRD\", return: -0.2 }\n      - { tag: \"currency:QMV\", return: 0.1 }\n      - { tag: \"class:equity\", return: -0.1 }\n",
    );
    (f, m, quoted)
}

/// Each scenario's label (start/end dates) and its returns, from scenarios.csv.
fn scenarios(f: &Fixture) -> Vec<(NaiveDate, NaiveDate, Vec<f64>)> {
    let text =
        std::fs::read_to_string(f.path("out/test-fund-fictional/2024-06-28/r1/scenarios.csv"))
            .expect("scenarios.csv");
    text.lines()
        .skip(1)
        .map(|l| {
            let mut cells = l.split(',');
            let (a, b) = cells.next().unwrap().split_once('/').unwrap();
            let r = cells.map(|c| c.parse().unwrap()).collect();
            (a.parse().unwrap(), b.parse().unwrap(), r)
        })
        .collect()
}

fn results(f: &Fixture) -> serde_json::Value {
    json(&f.path("out/test-fund-fictional/2024-06-28/r1/results.json"))
}

fn run_ok(f: &Fixture) {
    let r = f.run(&["run", "fund.yaml"]);
    assert_eq!(r.code, 0, "{}\n{}", r.stdout, r.stderr);
}

/// Unhedged: (1 + r_local)(1 + r_fx) − 1 over every scenario's horizon, the rate of a date the rate feed
/// skips being the latest earlier one; fully hedged at a zero differential: the local return; the base
/// currency asset: its own return.
#[test]
fn base_currency_returns_follow_the_parity_relations() {
    let (f, m, quoted) = fund("currency:\n  hedge:\n    class: { bond: 1.0 }\n", false);
    run_ok(&f);
    let sc = scenarios(&f);
    assert!(sc.len() > 300, "{}", sc.len());
    for (a, b, r) in &sc {
        let local = |i| price_on(&m, *b, i) / price_on(&m, *a, i) - 1.0;
        let fx = |k| rate_on(&quoted, *b, k) / rate_on(&quoted, *a, k) - 1.0;
        assert!((r[0] - local(0)).abs() < 1e-12, "{a}/{b}");
        assert!((r[1] - local(1)).abs() < 1e-12, "{a}/{b}: hedged");
        let want = (1.0 + local(2)) * (1.0 + fx(1)) - 1.0;
        assert!((r[2] - want).abs() < 1e-12, "{a}/{b}: {} vs {want}", r[2]);
    }
    let res = results(&f);
    let per: Vec<(String, f64)> = res["currency"]["per_asset"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| {
            (
                a["currency"].as_str().unwrap().to_string(),
                a["hedge_ratio"].as_f64().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        per,
        [
            ("XTS".into(), 0.0),
            ("QMV".into(), 1.0),
            ("QRD".into(), 0.0)
        ]
    );
    // Equal holdings of a third each: a third in each foreign currency before hedging; QMV hedged away.
    let cur = &res["currency"]["exposure"]["current"];
    assert!((cur["QMV"]["before_hedging"].as_f64().unwrap() - 1.0 / 3.0).abs() < 1e-9);
    assert!(cur["QMV"]["after_hedging"].as_f64().unwrap().abs() < 1e-12);
    assert!((cur["QRD"]["after_hedging"].as_f64().unwrap() - 1.0 / 3.0).abs() < 1e-9);
    assert!(
        res["inputs"]
            .as_array()
            .unwrap()
            .iter()
            .any(|i| i["role"] == "fx")
    );
    // CVaR at 95% with and without currency moves: the second on the local returns of the same windows.
    let third = 1.0 / 3.0;
    let base: Vec<f64> = sc
        .iter()
        .map(|(_, _, r)| -third * r.iter().sum::<f64>())
        .collect();
    let local: Vec<f64> = sc
        .iter()
        .map(|(a, b, _)| {
            -third
                * (0..3)
                    .map(|i| price_on(&m, *b, i) / price_on(&m, *a, i) - 1.0)
                    .sum::<f64>()
        })
        .collect();
    let cv = &res["currency"]["cvar"]["current"];
    let (want, want_local) = (cvar(&base, 0.95), cvar(&local, 0.95));
    assert!((cv["cvar"].as_f64().unwrap() - want).abs() < 1e-9);
    assert!((cv["cvar_without_currency_moves"].as_f64().unwrap() - want_local).abs() < 1e-9);
    let share = cv["currency_share"].as_f64().unwrap();
    assert!((share - (want - want_local) / want).abs() < 1e-9);
    assert!(
        share.abs() > 1e-3,
        "the unhedged QRD third moves CVaR: {share}"
    );
    // The PDF shows them in "Tail loss" (read back by poppler's pdftotext) and the currency table.
    let pdf = super::common::pdf_text(&f.path("out/test-fund-fictional/2024-06-28/r1/pack.pdf"));
    let line = pdf
        .lines()
        .find(|l| l.trim_start().starts_with("Without currency moves"))
        .expect("the CVaR without currency moves");
    assert!(
        line.contains(&format!("{:.2}%", want_local * 100.0)),
        "{line}"
    );
    assert!(pdf.contains("Exposure per currency before and after hedging"));
    let qmv = pdf
        .lines()
        .find(|l| l.trim_start().starts_with("QMV") && l.contains("100.00%"));
    assert!(qmv.is_some(), "the appendix's QMV row with its hedge ratio");
}

/// CVaR of equally likely losses by Rockafellar & Uryasev (2000): min over ℓ of ℓ + E[(L − ℓ)⁺]/(1 − c),
/// the minimum taken at one of the losses (the function is piecewise linear with kinks there).
fn cvar(losses: &[f64], c: f64) -> f64 {
    let n = losses.len() as f64;
    losses
        .iter()
        .map(|&l| l + losses.iter().map(|x| (x - l).max(0.0)).sum::<f64>() / n / (1.0 - c))
        .fold(f64::INFINITY, f64::min)
}

/// Half hedged with an annual forward premium: the index compounds, observation by observation,
/// h·(r_local + f) + (1 − h)·((1 + r_local)(1 + r_fx) − 1) with f = (1 + p)^(days/365) − 1.
#[test]
fn a_partial_hedge_with_a_forward_premium_compounds_each_observation() {
    let (f, m, quoted) = fund(
        "currency:\n  hedge:\n    asset: { AS03: 0.5 }\n  rate_differential: { QRD: 0.04 }\n",
        false,
    );
    run_ok(&f);
    let (h, p) = (0.5, 0.04);
    for (a, b, r) in scenarios(&f).iter().step_by(13) {
        let days: Vec<NaiveDate> = m
            .dates
            .iter()
            .copied()
            .filter(|d| d >= a && d <= b)
            .collect();
        let growth: f64 = days
            .windows(2)
            .map(|w| {
                let rl = price_on(&m, w[1], 2) / price_on(&m, w[0], 2) - 1.0;
                let rx = rate_on(&quoted, w[1], 1) / rate_on(&quoted, w[0], 1) - 1.0;
                let fwd = (1.0f64 + p).powf((w[1] - w[0]).num_days() as f64 / 365.0) - 1.0;
                1.0 + h * (rl + fwd) + (1.0 - h) * ((1.0 + rl) * (1.0 + rx) - 1.0)
            })
            .product();
        assert!(
            (r[2] - (growth - 1.0)).abs() < 1e-10,
            "{a}/{b}: {} vs {}",
            r[2],
            growth - 1.0
        );
    }
}

/// A `currency:XXX` move reaches the unhedged part of the assets priced in it, on top of their own move:
/// (1 + r_local)(1 + (1 − h)·s) − 1.
#[test]
fn a_currency_shock_moves_the_unhedged_part() {
    let (f, _, _) = fund("currency:\n  hedge:\n    class: { bond: 0.25 }\n", true);
    run_ok(&f);
    let res = results(&f);
    let shock = &res["stress"]["shocks"][0];
    assert_eq!(shock["name"], "Devaluation");
    let r = |a: &str| shock["returns"][a].as_f64().unwrap();
    assert!((r("AS01") - -0.1).abs() < 1e-12);
    assert!((r("AS02") - 0.75 * 0.1).abs() < 1e-12);
    assert!((r("AS03") - (0.9 * 0.8 - 1.0)).abs() < 1e-12);
}

/// The most specific hedge ratio wins: an asset's own beats its tag's, a tag's beats its class's; an asset
/// in the base currency has nothing to hedge.
#[test]
fn the_most_specific_hedge_ratio_wins() {
    let (f, _, _) = fund(
        "currency:\n  hedge:\n    class: { bond: 0.3, equity: 0.2 }\n    tag: { \"region:a\": 0.6 }\n    asset: { AS03: 0.9 }\n",
        false,
    );
    f.write(
        "data/assets.csv",
        "asset,class,max_weight,currency,region\nAS01,equity,0.6,,a\nAS02,bond,0.6,QMV,a\nAS03,equity,0.6,QRD,a\n",
    );
    run_ok(&f);
    let res = results(&f);
    let ratios: Vec<f64> = res["currency"]["per_asset"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["hedge_ratio"].as_f64().unwrap())
        .collect();
    assert_eq!(ratios, [0.0, 0.6, 0.9]);
}

/// The rate file in the long layout (`date,currency,rate`) gives the same scenarios as the wide one.
#[test]
fn long_and_wide_rate_files_give_the_same_scenarios() {
    let (f, _, quoted) = fund("", false);
    run_ok(&f);
    let wide = scenarios(&f);
    let mut long = String::from("date,currency,rate\n");
    for (d, x) in &quoted {
        long.push_str(&format!("{d},QRD,{:.6}\n{d},QMV,{:.6}\n", x[1], x[0]));
    }
    f.write("data/rates.csv", &long);
    let _ = std::fs::remove_dir_all(f.path("out"));
    run_ok(&f);
    assert_eq!(scenarios(&f), wide);
}
