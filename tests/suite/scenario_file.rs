//! Scenario files (`data.scenarios`): the file path against the price-history path on the same returns,
//! probabilities against repeated rows (the CVaR of a discrete distribution depends only on the
//! distribution: Rockafellar & Uryasev 2002, "Conditional value-at-risk for general loss distributions",
//! J. Banking & Finance 26, Prop. 8 / eq. (5)), CSV against Parquet, and the simulated demo end to end.

use super::common::{Fixture, Market, config, json, repo, run_in};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::time::Duration;

const LIMIT: Duration = Duration::from_secs(300);

/// The pack a run printed as its last line (relative to the fixture folder, or absolute).
fn pack(fx: &Fixture, stdout: &str) -> PathBuf {
    fx.dir
        .path()
        .join(stdout.lines().last().expect("the pack's path"))
}

/// Runs `tailpack run` in the fixture and returns the pack's results.json.
fn run(fx: &Fixture, cfg: &str, out: &str, extra: &[&str]) -> (Value, PathBuf) {
    let mut args = vec!["run", cfg, "--out", out];
    args.extend(extra);
    let r = run_in(fx.dir.path(), &args, LIMIT);
    assert_eq!(r.code, 0, "{}\n{}", r.stdout, r.stderr);
    let p = pack(fx, &r.stdout);
    (json(&p.join("results.json")), p)
}

/// Each model's weights, VaR and CVaR, and the current portfolio's VaR and CVaR.
fn figures(r: &Value) -> Vec<(String, f64)> {
    let mut out = vec![];
    for (name, m) in r["models"].as_object().unwrap() {
        for (a, w) in m["weights"].as_object().unwrap() {
            out.push((format!("{name}.{a}"), w.as_f64().unwrap()));
        }
        out.push((format!("{name}.var"), m["var"].as_f64().unwrap()));
        out.push((format!("{name}.cvar"), m["cvar"].as_f64().unwrap()));
    }
    out.push((
        "current.expected_return".into(),
        r["current"]["expected_return"].as_f64().unwrap(),
    ));
    for l in r["current"]["levels"].as_array().unwrap() {
        for k in ["var", "cvar"] {
            out.push((
                format!("current.{k}@{}", l["level"]),
                l[k].as_f64().unwrap(),
            ));
        }
    }
    out
}

fn assert_same(a: &Value, b: &Value, tol: f64) {
    let (fa, fb) = (figures(a), figures(b));
    assert_eq!(fa.len(), fb.len());
    assert!(fa.len() > 10, "{fa:?}");
    for ((ka, va), (kb, vb)) in fa.iter().zip(&fb) {
        assert_eq!(ka, kb);
        assert!((va - vb).abs() <= tol, "{ka}: {va} vs {vb}");
    }
}

/// A config whose scenarios come from `file`, with or without the price file.
fn file_config(file: &str, prices: bool, tail: &str) -> String {
    let prices = if prices {
        "  prices: data/prices.csv\n"
    } else {
        ""
    };
    format!(
        "fund:\n  name: Test Fund (fictional)\ndata:\n{prices}  scenarios: {file}\n  assets: data/assets.csv\n  holdings: data/holdings.csv\nscenarios:\n  horizon: 5\n  lookback_years: 2\noutput:\n  root: out\n{tail}"
    )
}

#[test]
fn the_scenarios_a_history_run_used_give_the_same_results_from_a_file() {
    let fx = Fixture::new();
    let m = Market::new(4, "2022-01-03", "2024-06-28", 11);
    // Decaying probabilities, so the file carries a probability column.
    let base = config("").replace(
        "  lookback_years: 2\n",
        "  lookback_years: 2\n  half_life: 60\n",
    );
    fx.small_fund(&m, &base);
    let (history, p) = run(&fx, "fund.yaml", "out-h", &[]);
    assert_eq!(history["scenarios"]["source"]["kind"], "price_history");
    std::fs::copy(p.join("scenarios.csv"), fx.path("data/written.csv")).unwrap();
    let both = file_config("data/written.csv", true, "").replace(
        "  lookback_years: 2\n",
        "  lookback_years: 2\n  half_life: 60\n",
    );
    fx.write("both.yaml", &both);
    let (from_file, p2) = run(&fx, "both.yaml", "out-f", &[]);
    assert_same(&history, &from_file, 1e-12);
    assert_eq!(
        from_file["scenarios"]["count"],
        history["scenarios"]["count"]
    );
    assert_eq!(from_file["scenarios"]["equal_probabilities"], false);
    let source = &from_file["scenarios"]["source"];
    assert_eq!(source["kind"], "file");
    assert_eq!(source["file"], "written.csv");
    assert_eq!(
        source["sha256"].as_str().unwrap(),
        sha256(&p.join("scenarios.csv"))
    );
    // The pack keeps the file as its archived input and does not write the scenarios again.
    assert!(!p2.join("scenarios.csv").exists());
    assert!(p2.join("inputs/scenarios.csv").is_file());
    // Without the price file, the as-of date from the command line; same results.
    fx.write("alone.yaml", &file_config("data/written.csv", false, ""));
    let as_of = history["as_of"].as_str().unwrap().to_string();
    let (alone, p3) = run(&fx, "alone.yaml", "out-a", &["--as-of", &as_of]);
    assert_same(&history, &alone, 1e-12);
    let not_run: Vec<&str> = alone["scenarios"]["source"]["not_run"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert!(not_run.contains(&"walk-forward backtest"), "{not_run:?}");
    assert!(
        not_run.contains(&"historical stress windows"),
        "{not_run:?}"
    );
    assert!(alone["checks"].as_array().unwrap().iter().any(|c| {
        c["message"]
            .as_str()
            .unwrap_or("")
            .contains("from the scenario file written.csv")
    }));
    // A re-run from the archived inputs (the archived scenario file) gives the same bytes.
    let pack_arg = p3.to_string_lossy().into_owned();
    let v = fx.run(&["verify", "--rerun", &pack_arg]);
    assert_eq!(v.code, 0, "{}\n{}", v.stdout, v.stderr);
}

/// SHA-256 of a file by the system's `sha256sum` (outside tailpack).
fn sha256(path: &Path) -> String {
    let out = std::process::Command::new("sha256sum")
        .arg(path)
        .output()
        .expect("sha256sum runs");
    String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .next()
        .unwrap()
        .to_string()
}

/// `s` distinct scenarios of 4 assets, deterministic, with a multiplicity of 1 to 3 each.
fn distinct(s: usize) -> Vec<(Vec<f64>, usize)> {
    let mut rng = <rand::rngs::StdRng as rand::SeedableRng>::seed_from_u64(5);
    (0..s)
        .map(|k| {
            let common = super::common::normal(&mut rng);
            let row = (0..4)
                .map(|i| {
                    let vol = 0.01 + 0.01 * i as f64;
                    0.001 * i as f64 + vol * (0.6 * common + 0.8 * super::common::normal(&mut rng))
                })
                .collect();
            (row, 1 + k % 3)
        })
        .collect()
}

fn header(probability: bool) -> String {
    let p = if probability { ",probability" } else { "" };
    format!("scenario{p},AS01,AS02,AS03,AS04\n")
}

fn cells(row: &[f64]) -> String {
    row.iter().map(|v| format!(",{v:?}")).collect()
}

#[test]
fn a_probability_weighs_a_scenario_as_repeated_rows_would() {
    let fx = Fixture::new();
    let m = Market::new(4, "2022-01-03", "2024-06-28", 11);
    fx.small_fund(&m, &config(""));
    let rows = distinct(150);
    let total: usize = rows.iter().map(|(_, k)| k).sum();
    let mut weighted = header(true);
    let mut repeated = header(false);
    for (k, (row, times)) in rows.iter().enumerate() {
        let p = *times as f64 / total as f64;
        weighted.push_str(&format!("W{k},{p:?}{}\n", cells(row)));
        for j in 0..*times {
            repeated.push_str(&format!("R{k}-{j}{}\n", cells(row)));
        }
    }
    fx.write("data/weighted.csv", &weighted);
    fx.write("data/repeated.csv", &repeated);
    fx.write("w.yaml", &file_config("data/weighted.csv", false, ""));
    fx.write("r.yaml", &file_config("data/repeated.csv", false, ""));
    let (w, _) = run(&fx, "w.yaml", "out-w", &["--as-of", "2024-06-28"]);
    let (r, _) = run(&fx, "r.yaml", "out-r", &["--as-of", "2024-06-28"]);
    assert_same(&w, &r, 1e-9);
    // The current portfolio (0.25 each) against the discrete CVaR computed here from the rows:
    // CVaR_α = VaR_α + Σ_k p_k (L_k − VaR_α)⁺ / (1 − α), VaR_α the α-quantile of the loss L = −r·x
    // (Rockafellar & Uryasev 2002, Prop. 8 and eq. (5)).
    let alpha = w["confidence"].as_f64().unwrap();
    let mut losses: Vec<(f64, f64)> = rows
        .iter()
        .map(|(row, t)| (-row.iter().sum::<f64>() / 4.0, *t as f64 / total as f64))
        .collect();
    losses.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut cum = 0.0;
    let var = losses
        .iter()
        .find(|(_, p)| {
            cum += p;
            cum >= alpha - 1e-12
        })
        .unwrap()
        .0;
    let cvar = var
        + losses
            .iter()
            .map(|(l, p)| p * (l - var).max(0.0))
            .sum::<f64>()
            / (1.0 - alpha);
    let at = w["current"]["levels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|l| l["level"].as_f64() == Some(alpha))
        .unwrap();
    let got = at["cvar"].as_f64().unwrap();
    assert!((got - cvar).abs() < 1e-12, "{got} vs {cvar}");
    assert!(
        (at["var"].as_f64().unwrap() - var).abs() < 1e-12,
        "{} vs {var}",
        at["var"]
    );
}

#[test]
fn csv_and_parquet_scenario_files_give_the_same_results() {
    use polars::prelude::*;
    let fx = Fixture::new();
    let m = Market::new(4, "2022-01-03", "2024-06-28", 11);
    fx.small_fund(&m, &config(""));
    let rows = distinct(120);
    let mut csv = header(true);
    let total: usize = rows.iter().map(|(_, k)| k).sum();
    let probs: Vec<f64> = rows.iter().map(|(_, t)| *t as f64 / total as f64).collect();
    for (k, (row, _)) in rows.iter().enumerate() {
        csv.push_str(&format!("S{k},{:?}{}\n", probs[k], cells(row)));
    }
    fx.write("data/s.csv", &csv);
    let mut cols = vec![
        Column::new(
            "scenario".into(),
            (0..rows.len()).map(|k| format!("S{k}")).collect::<Vec<_>>(),
        ),
        Column::new("probability".into(), probs.clone()),
    ];
    for i in 0..4 {
        let v: Vec<f64> = rows.iter().map(|(r, _)| r[i]).collect();
        cols.push(Column::new(format!("AS{:02}", i + 1).into(), v));
    }
    let mut df = DataFrame::new_infer_height(cols).unwrap();
    ParquetWriter::new(std::fs::File::create(fx.path("data/s.parquet")).unwrap())
        .finish(&mut df)
        .unwrap();
    fx.write("c.yaml", &file_config("data/s.csv", false, ""));
    fx.write("p.yaml", &file_config("data/s.parquet", false, ""));
    let (c, _) = run(&fx, "c.yaml", "out-c", &["--as-of", "2024-06-28"]);
    let (p, pp) = run(&fx, "p.yaml", "out-p", &["--as-of", "2024-06-28"]);
    assert_same(&c, &p, 0.0);
    assert!(pp.join("inputs/scenarios.parquet").is_file());
}

#[test]
fn the_simulated_demo_is_the_generators_output_and_runs_end_to_end() {
    let fx = Fixture::new();
    let r = fx.run(&[
        "demo-scenarios",
        "gen",
        "--assets",
        "50",
        "--scenarios",
        "5000",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let demo = repo().join("config-demo/simulated");
    for f in ["scenarios.csv", "assets.csv", "holdings.csv"] {
        assert!(
            std::fs::read(fx.path(&format!("gen/{f}"))).unwrap()
                == std::fs::read(demo.join(f)).unwrap(),
            "config-demo/simulated/{f} is not the generator's output: run `tailpack demo-scenarios config-demo/simulated --assets 50 --scenarios 5000`"
        );
    }
    let cfg = repo().join("config-demo/simulated.yaml");
    let check = fx.run(&["check", &cfg.to_string_lossy(), "--as-of", "2026-11-30"]);
    assert_eq!(check.code, 0, "{}", check.stderr);
    assert!(
        check
            .stdout
            .contains("5000 scenarios of 50 assets from the scenario file scenarios.csv"),
        "{}",
        check.stdout
    );
    let out = fx.path("out");
    let ran = fx.run(&[
        "run",
        &cfg.to_string_lossy(),
        "--as-of",
        "2026-11-30",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert_eq!(ran.code, 0, "{}\n{}", ran.stdout, ran.stderr);
    let p = pack(&fx, &ran.stdout);
    let r = json(&p.join("results.json"));
    assert_eq!(r["scenarios"]["count"], 5000);
    assert_eq!(r["assets"].as_array().unwrap().len(), 50);
    for m in ["max_return", "min_cvar", "max_ratio"] {
        assert_eq!(r["models"][m]["status"], "optimal", "{m}");
    }
    // A later pack reads the previous pack's scenarios back from its archived scenario file (comment
    // lines and all) to split the change in CVaR.
    let later = fx.run(&[
        "run",
        &cfg.to_string_lossy(),
        "--as-of",
        "2026-12-31",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert_eq!(later.code, 0, "{}", later.stderr);
    let change =
        json(&pack(&fx, &later.stdout).join("results.json"))["change"]["current_cvar"].clone();
    assert!(
        change.get("note").is_none() && change.is_object(),
        "{change}"
    );
    let text = super::common::pdf_text(&p.join("pack.pdf"));
    assert!(
        text.contains("scenario file"),
        "the PDF says where the scenarios come from"
    );
}

#[test]
fn a_large_universe_lists_the_candidates_largest_holdings_and_says_what_it_leaves_out() {
    let fx = Fixture::new();
    let r = fx.run(&[
        "demo-scenarios",
        "sim",
        "--assets",
        "300",
        "--scenarios",
        "600",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let cfg = std::fs::read_to_string(repo().join("config-demo/simulated.yaml"))
        .unwrap()
        .replace("simulated/", "sim/")
        .replace("  root: ../out", "  root: out");
    fx.write("fund.yaml", &cfg);
    let (results, p) = run(&fx, "fund.yaml", "out", &["--as-of", "2026-11-30"]);
    let text = super::common::squeeze(&super::common::pdf_text(&p.join("pack.pdf")));
    assert!(
        text.contains("The table lists the 250 assets with the largest weight in any candidate portfolio, of 300 in the universe; each of the other 50 weighs at most"),
        "{text}"
    );
    // Every asset a model holds above 1/300 (each asset's current weight) is among the 250 listed (its
    // code is in the PDF's text).
    for (name, m) in results["models"].as_object().unwrap() {
        for (asset, w) in m["weights"].as_object().unwrap() {
            if w.as_f64().unwrap() > 0.0034 {
                assert!(
                    text.contains(asset.as_str()),
                    "{name}: {asset} held at {w} is not listed"
                );
            }
        }
    }
}
