//! Assets valued monthly or quarterly: Geltner unsmoothing against its published formula and against an
//! AR(1)-smoothed series of known ρ, month-end scenarios end to end, the flags of appraisal-like series, and
//! the demo pack's valuation table.
//!
//! The smoothing model the tests build series with (Geltner 1993; Getmansky, Lo & Makarov 2004 in its
//! first-order form): the reported return is R*_t = (1 − ρ) R_t + ρ R*_{t−1} with R_t independent, mean μ,
//! variance σ². Then R* is a first-order autoregression with coefficient ρ, so its first-order
//! autocorrelation is ρ, and its variance solves v = (1 − ρ)² σ² + ρ² v, i.e. v = σ² (1 − ρ)² / (1 − ρ²) =
//! σ² (1 − ρ)/(1 + ρ). Hence the true (unsmoothed) volatility is the observed one × √((1 + ρ)/(1 − ρ)), and
//! Geltner's inverse R_t = (R*_t − ρ R*_{t−1})/(1 − ρ) gives back R_t exactly.

use super::common::{Fixture, Market, json, normal, pdf_text};
use rand::SeedableRng;
use tailpack::ingest::valuation::{autocorrelation, geltner, standard_error, volatility};

/// `n` independent returns N(mu, sigma²) and their smoothing with `rho` (R*_0 = (1 − ρ) R_0).
fn smoothed(n: usize, mu: f64, sigma: f64, rho: f64, seed: u64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let truth: Vec<f64> = (0..n).map(|_| mu + sigma * normal(&mut rng)).collect();
    let mut prev = 0.0;
    let observed = truth
        .iter()
        .map(|r| {
            prev = (1.0 - rho) * r + rho * prev;
            prev
        })
        .collect();
    (truth, observed)
}

/// Box, Jenkins & Reinsel, eq. 2.1.12, written out here apart from the library.
fn r1(x: &[f64]) -> f64 {
    let m = x.iter().sum::<f64>() / x.len() as f64;
    let den: f64 = x.iter().map(|v| (v - m) * (v - m)).sum();
    let num: f64 = x.windows(2).map(|w| (w[0] - m) * (w[1] - m)).sum();
    num / den
}

#[test]
fn geltner_inverse_gives_back_the_true_returns_of_a_smoothed_series() {
    for rho in [0.2, 0.5, 0.8] {
        let (truth, observed) = smoothed(500, 0.004, 0.03, rho, 11);
        let back = geltner(&observed, rho);
        // Every return after the first: (R*_t − ρ R*_{t−1})/(1 − ρ) = R_t exactly (the model above).
        for t in 1..truth.len() {
            assert!(
                (back[t] - truth[t]).abs() < 1e-12,
                "ρ {rho}, t {t}: {} vs {}",
                back[t],
                truth[t]
            );
        }
    }
}

#[test]
fn the_estimate_recovers_a_known_rho_and_the_volatility_ratio() {
    for (rho, seed) in [(0.3, 1), (0.5, 2), (0.7, 3)] {
        let n = 20_000;
        let (truth, observed) = smoothed(n, 0.005, 0.03, rho, seed);
        let est = autocorrelation(&observed).unwrap();
        assert!((est - r1(&observed)).abs() < 1e-12, "r₁ against eq. 2.1.12");
        let se = standard_error(est, n - 1);
        // Bartlett (1946): var(r₁) ≈ (1 − ρ²)/n for a first-order autoregression.
        assert!(
            (se - ((1.0 - est * est) / (n - 1) as f64).sqrt()).abs() < 1e-15,
            "standard error formula"
        );
        assert!(
            (est - rho).abs() <= 2.0 * se,
            "ρ {rho}: estimate {est} more than two standard errors ({se}) away"
        );
        // σ_true = σ_observed · √((1 + ρ)/(1 − ρ)) (derived in the module doc), within sampling error
        // (the standard deviation of a sample volatility of 20,000 values is about 0.5%).
        let observed_vol = volatility(&observed);
        let want = observed_vol * ((1.0 + est) / (1.0 - est)).sqrt();
        let unsmoothed_vol = volatility(&geltner(&observed, est));
        assert!(
            (unsmoothed_vol / want - 1.0).abs() < 0.03,
            "ρ {rho}: unsmoothed vol {unsmoothed_vol} against {want}"
        );
        assert!(
            (unsmoothed_vol / volatility(&truth) - 1.0).abs() < 0.03,
            "ρ {rho}: unsmoothed vol {unsmoothed_vol} against the true {}",
            volatility(&truth)
        );
    }
}

#[test]
fn the_standard_error_covers_the_estimate_about_two_times_in_three() {
    // Within one standard error of the true ρ about 68.3% of the time (the normal approximation behind
    // Bartlett's formula); 400 independent series of 400 returns: the share's own standard deviation is
    // √(0.683 · 0.317 / 400) ≈ 0.023, so [0.60, 0.76] is more than three of them either side.
    let rho = 0.5;
    let within = (0..400)
        .filter(|&seed| {
            let (_, observed) = smoothed(400, 0.0, 0.02, rho, 1000 + seed);
            let est = autocorrelation(&observed).unwrap();
            (est - rho).abs() <= standard_error(est, observed.len() - 1)
        })
        .count();
    let share = within as f64 / 400.0;
    assert!(
        (0.60..=0.76).contains(&share),
        "share within one s.e.: {share}"
    );
}

/// A small fund: three daily assets and `PF01`, valued at each month's last business day only (blank on
/// other days unless `repeat`, then its last value repeated), its monthly returns smoothed with ρ = 0.6.
/// Returns the market and PF01's value per business day.
fn fund_with_appraised(
    f: &Fixture,
    columns: &str,
    cells: &str,
    config: &str,
    repeat: bool,
) -> (Market, Vec<Option<f64>>) {
    use chrono::Datelike;
    let m = Market::new(3, "2015-01-01", "2024-12-31", 5);
    let ends: Vec<bool> = (0..m.dates.len())
        .map(|i| i + 1 == m.dates.len() || m.dates[i + 1].month() != m.dates[i].month())
        .collect();
    let months = ends.iter().filter(|e| **e).count();
    let (_, observed) = smoothed(months, 0.004, 0.035, 0.6, 77);
    let (mut level, mut k, mut values) = (100.0, 0, Vec::new());
    for end in &ends {
        if *end {
            level *= 1.0 + observed[k];
            k += 1;
        }
        values.push((*end || (repeat && k > 0)).then_some(level));
    }
    let mut prices = format!("date,{},PF01\n", m.assets.join(","));
    for ((d, row), v) in m.dates.iter().zip(&m.prices).zip(&values) {
        let cells: Vec<String> = row.iter().map(|p| format!("{p:.6}")).collect();
        let pf = v.map(|p| format!("{p:.6}")).unwrap_or_default();
        prices.push_str(&format!("{d},{},{pf}\n", cells.join(",")));
    }
    f.write("data/prices.csv", &prices);
    let mut assets = format!("asset,class,max_weight{columns}\n");
    for (a, c) in m.assets.iter().zip(&m.classes) {
        assets.push_str(&format!(
            "{a},{c},0.6{}\n",
            if columns.is_empty() { "" } else { ",daily," }
        ));
    }
    assets.push_str(&format!("PF01,property,0.6{cells}\n"));
    f.write("data/assets.csv", &assets);
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.25\nAS02,0.25\nAS03,0.25\nPF01,0.25\n",
    );
    // The fund with a given ρ also runs a one-year backtest asking for the daily traffic light.
    let backtest = if config.contains("geltner_rho") {
        "  backtest_years: 1\n  daily_var_check: true\n"
    } else {
        "  backtest_years: 0\n  daily_var_check: false\n"
    };
    f.write(
        "fund.yaml",
        &format!("fund:\n  name: Appraisal Test Fund (fictional)\ndata:\n  prices: data/prices.csv\n  assets: data/assets.csv\n  holdings: data/holdings.csv\n{config}analysis:\n{backtest}  frontier_points: 2\n  band_resamples: 0\noutput:\n  root: out\n"),
    );
    (m, values)
}

const MONTHLY: &str = "scenarios:\n  frequency: monthly\n  horizon: 1\n  lookback_years: 8\n";

/// Scenario returns of one asset column of scenarios.csv.
fn scenario_column(dir: &std::path::Path, asset: &str) -> Vec<f64> {
    let text = std::fs::read_to_string(dir.join("scenarios.csv")).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let c = head.iter().position(|h| *h == asset).unwrap();
    lines
        .map(|l| l.split(',').nth(c).unwrap().parse().unwrap())
        .collect()
}

/// The pack folder a successful run printed last (relative paths are the fixture's).
fn pack(f: &Fixture, ran: &super::common::Ran) -> std::path::PathBuf {
    assert_eq!(ran.code, 0, "{}{}", ran.stdout, ran.stderr);
    f.dir.path().join(ran.stdout.trim().lines().last().unwrap())
}

#[test]
fn a_monthly_fund_unsmooths_its_appraised_asset_by_the_published_formula() {
    let f = Fixture::new();
    let (m, values) = fund_with_appraised(
        &f,
        ",valuation,smoothing",
        ",monthly,geltner",
        MONTHLY,
        false,
    );
    let dir = pack(&f, &f.run(&["run", "fund.yaml", "--quiet"]));
    let r = json(&dir.join("results.json"));
    assert_eq!(r["scenarios"]["frequency"], "monthly");
    // Month-end observations as the price file writes them (six decimals): PF01's values and AS01's last price of each
    // month, up to as-of (2024-12-31, a month-end).
    let written = |x: f64| format!("{x:.6}").parse::<f64>().unwrap();
    let pf: Vec<f64> = values.iter().flatten().map(|v| written(*v)).collect();
    let as01: Vec<f64> = values
        .iter()
        .zip(&m.prices)
        .filter(|(v, _)| v.is_some())
        .map(|(_, row)| written(row[0]))
        .collect();
    let s = r["scenarios"]["count"].as_u64().unwrap() as usize;
    let first = pf.len() - 1 - s; // the window's first month-end
    let obs: Vec<f64> = pf.windows(2).map(|w| w[1] / w[0] - 1.0).collect();
    // ρ estimated over the window: r₁ of the window's observed monthly returns (eq. 2.1.12).
    let rho = r1(&obs[first..]);
    let v = r["valuation"]
        .as_array()
        .unwrap()
        .iter()
        .find(|v| v["asset"] == "PF01")
        .unwrap();
    assert_eq!(v["valuation"], "monthly");
    assert_eq!(v["unsmoothed"]["rho_source"], "estimated");
    let got = v["unsmoothed"]["rho"].as_f64().unwrap();
    assert!((got - rho).abs() < 1e-9, "ρ {got} against {rho}");
    // The scenarios hold Geltner's R_t = (R*_t − ρ R*_{t−1})/(1 − ρ), R*_{t−1} being the month before
    // (outside the window for the first scenario), and AS01's month-end returns as they are.
    let want_pf: Vec<f64> = (first..obs.len())
        .map(|t| (obs[t] - rho * obs[t - 1]) / (1.0 - rho))
        .collect();
    let got_pf = scenario_column(&dir, "PF01");
    assert_eq!(got_pf.len(), want_pf.len());
    for (g, w) in got_pf.iter().zip(&want_pf) {
        assert!((g - w).abs() < 1e-6, "PF01 scenario {g} against {w}");
    }
    let got_as = scenario_column(&dir, "AS01");
    for (t, g) in got_as.iter().enumerate() {
        let w = as01[first + t + 1] / as01[first + t] - 1.0;
        assert!((g - w).abs() < 1e-9, "AS01 scenario {t}: {g} against {w}");
    }
    // Volatilities: the sample standard deviations of the observed and unsmoothed window returns.
    let obs_vol = volatility(&obs[first..]);
    assert!((v["unsmoothed"]["observed_volatility"].as_f64().unwrap() - obs_vol).abs() < 1e-9);
    let uns_vol = v["unsmoothed"]["unsmoothed_volatility"].as_f64().unwrap();
    assert!((uns_vol - volatility(&want_pf)).abs() < 1e-6);
    // The data appendix shows the row; the caveats say how few monthly scenarios there are.
    let text = super::common::squeeze(&pdf_text(&dir.join("pack.pdf")));
    assert!(text.contains("Valuation and unsmoothing"), "table title");
    assert!(
        text.contains(&format!("PF01 monthly {rho:.2} estimated")),
        "PF01 row"
    );
    assert!(text.contains(&format!("Few monthly scenarios Scenarios are built on month-end observations (scenarios.frequency: monthly): the 8-year look-back gives {s} scenarios")));
}

#[test]
fn a_given_rho_is_used_as_given() {
    let f = Fixture::new();
    let config = format!("{MONTHLY}  geltner_rho: {{ PF01: 0.25 }}\n");
    fund_with_appraised(
        &f,
        ",valuation,smoothing",
        ",monthly,geltner",
        &config,
        false,
    );
    let dir = pack(&f, &f.run(&["run", "fund.yaml", "--quiet"]));
    let r = json(&dir.join("results.json"));
    let v = &r["valuation"].as_array().unwrap()[3];
    assert_eq!(
        (v["asset"].as_str(), v["unsmoothed"]["rho_source"].as_str()),
        (Some("PF01"), Some("given"))
    );
    assert_eq!(v["unsmoothed"]["rho"], 0.25);
    // The walk-forward backtest runs unchanged on month-end observations: one rebalance at each month-end
    // on or after 2023-12-31 (a year before as-of, 2024-12-31; December 2023 ended on Friday the 29th) that
    // has a month after it: January to November 2024.
    let b = &r["backtest"];
    assert_eq!(
        (&b["first"], &b["last"], &b["rebalances"]),
        (&"2024-01-31".into(), &"2024-11-29".into(), &11.into()),
        "{b}"
    );
    let months = b["models"]["min_cvar"]["months"].as_array().unwrap();
    assert_eq!(
        months[0]["next"], "2024-02-29",
        "realised over the next month-end"
    );
    // This fund asks for the daily traffic light (analysis.daily_var_check: true): on month-end scenarios
    // it is not run, and the PDF says why.
    let text = super::common::squeeze(&pdf_text(&dir.join("pack.pdf")));
    assert!(
        text.contains("The daily 99% VaR traffic-light test needs daily observations; scenarios here are built on month-end observations (scenarios.frequency: monthly), so it is not run."),
        "no word on the daily traffic light"
    );
}

#[test]
fn an_unmarked_smoothed_series_is_flagged_with_its_evidence() {
    // Monthly: PF01's returns have r₁ ≈ 0.6, far above quality.autocorrelation_flag (0.3) and 2/√n.
    let f = Fixture::new();
    fund_with_appraised(&f, "", "", MONTHLY, false);
    let ran = f.run(&["run", "fund.yaml"]);
    let dir = pack(&f, &ran);
    let r = json(&dir.join("results.json"));
    let check = r["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["id"] == "quality.appraisal_autocorrelation")
        .expect("an autocorrelation flag");
    assert_eq!(check["level"], "warn");
    let msg = check["message"].as_str().unwrap();
    assert!(
        msg.contains("`PF01` (r₁ = 0.") && !msg.contains("AS01"),
        "{msg}"
    );
    // Daily, its value repeated between month-ends: the changes follow the month-end calendar.
    let f = Fixture::new();
    fund_with_appraised(
        &f,
        "",
        "",
        "scenarios:\n  horizon: 5\n  lookback_years: 2\n",
        true,
    );
    let ran = f.run(&["run", "fund.yaml"]);
    let dir = pack(&f, &ran);
    assert!(
        ran.stdout.contains("warn: appraisal-like series"),
        "{}",
        ran.stdout
    );
    let r = json(&dir.join("results.json"));
    let check = r["checks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["id"] == "quality.appraisal_calendar")
        .expect("a calendar flag");
    let msg = check["message"].as_str().unwrap();
    // 120 month-ends from 2015-01 to 2024-12: 119 changes after the first value, all on a month's last day.
    assert!(
        msg.contains("`PF01` (119 of its 119 price changes on the last observation of a month)"),
        "{msg}"
    );
    assert!(!msg.contains("AS0"), "{msg}");
}

/// The demo pack's valuation table and caveats against its results.json (README, "The PDF pack" rule for
/// percentages: two decimals).
pub fn demo_table_matches_results_json(text: &str, r: &serde_json::Value) {
    let flat = super::common::squeeze(text);
    assert!(flat.contains("Valuation and unsmoothing"), "table title");
    for v in r["valuation"].as_array().unwrap() {
        let Some(u) = v["unsmoothed"].as_object() else {
            continue;
        };
        let pct = |x: &serde_json::Value| format!("{:.2}%", x.as_f64().unwrap() * 100.0);
        let row = format!(
            "{} {} {:.2} {} {:.2} ± {:.2} {} {}",
            v["asset"].as_str().unwrap(),
            v["valuation"].as_str().unwrap(),
            u["rho"].as_f64().unwrap(),
            u["rho_source"].as_str().unwrap(),
            v["autocorrelation"].as_f64().unwrap(),
            v["standard_error"].as_f64().unwrap(),
            pct(&u["observed_volatility"]),
            pct(&u["unsmoothed_volatility"]),
        );
        assert!(
            flat.contains(&row),
            "row `{row}` missing from the data appendix"
        );
    }
    assert!(flat.contains("Few monthly scenarios"), "monthly caveat");
    assert!(flat.contains("Unsmoothed valuations"), "unsmoothing caveat");
}

#[test]
fn quarterly_scenarios_take_each_quarters_last_observation_end_to_end() {
    // scenarios.frequency: quarterly with a horizon of one quarter. Written out here from the price file
    // alone: each quarter's last business day in the file, every scenario the simple return from one such
    // day to the next (the month-end rule applied to quarters), the newest ending at as-of.
    use chrono::Datelike;
    let f = Fixture::new();
    let config = "scenarios:\n  frequency: quarterly\n  horizon: 1\n  lookback_years: 8\n";
    let (m, pf) = fund_with_appraised(&f, ",valuation,smoothing", ",monthly,none", config, false);
    let dir = pack(&f, &f.run(&["run", "fund.yaml", "--quiet"]));
    let quarter = |d: &chrono::NaiveDate| (d.year(), (d.month() - 1) / 3);
    let ends: Vec<usize> = (0..m.dates.len())
        .filter(|&i| i + 1 == m.dates.len() || quarter(&m.dates[i + 1]) != quarter(&m.dates[i]))
        .collect();
    let as_of = chrono::NaiveDate::from_ymd_opt(2024, 12, 31).unwrap();
    let first = as_of.checked_sub_months(chrono::Months::new(96)).unwrap();
    let window: Vec<usize> = ends.into_iter().filter(|&i| m.dates[i] >= first).collect();
    let text = std::fs::read_to_string(dir.join("scenarios.csv")).unwrap();
    let labels: Vec<&str> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap())
        .collect();
    assert_eq!(
        labels.len(),
        window.len() - 1,
        "one scenario per pair of quarter-ends"
    );
    for (k, pair) in window.windows(2).enumerate() {
        assert_eq!(
            labels[k],
            format!("{}/{}", m.dates[pair[0]], m.dates[pair[1]])
        );
    }
    let pf_returns = scenario_column(&dir, "PF01");
    let as1 = scenario_column(&dir, "AS01");
    for (k, pair) in window.windows(2).enumerate() {
        let (a, b) = (pf[pair[0]].unwrap(), pf[pair[1]].unwrap());
        // The price file holds six decimals of values near 100, so 1e-7 allows for that rounding only.
        let want = b / a - 1.0;
        assert!(
            (pf_returns[k] - want).abs() < 1e-7,
            "PF01 scenario {k}: {} vs {want}",
            pf_returns[k]
        );
        let (a, b) = (m.prices[pair[0]][0], m.prices[pair[1]][0]);
        let want = b / a - 1.0;
        assert!(
            (as1[k] - want).abs() < 1e-6,
            "AS01 scenario {k}: {} vs {want}",
            as1[k]
        );
    }
    let r = json(&dir.join("results.json"));
    assert_eq!(
        r["scenarios"]["frequency"], "quarterly",
        "{}",
        r["scenarios"]
    );
}
