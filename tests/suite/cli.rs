//! The real binary on fixture folders: the pack-folder contract, no look-ahead, layouts, errors.

use super::common::{Fixture, Market, config, edit_csv_rows, json, repo, with_cell};

fn pack_dir(ran: &super::common::Ran) -> std::path::PathBuf {
    assert_eq!(ran.code, 0, "stderr: {}", ran.stderr);
    std::path::PathBuf::from(ran.stdout.lines().last().expect("stdout has lines"))
}

fn standard() -> (Fixture, Market) {
    let f = Fixture::new();
    let m = Market::new(5, "2021-01-01", "2024-06-28", 42);
    f.small_fund(&m, &config("limits:\n  turnover_max: 0.8\n  groups:\n    - { name: Equity, tag: \"class:equity\", max: 0.7 }\n"));
    (f, m)
}

#[test]
fn run_writes_the_pack_contract() {
    let (f, m) = standard();
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    let dir = pack_dir(&ran);
    assert!(
        dir.is_dir(),
        "last stdout line must be the pack folder: {}",
        ran.stdout
    );
    let csv = std::fs::read_to_string(dir.join("scenarios.csv")).unwrap();
    assert_eq!(
        csv.lines().next().unwrap(),
        "scenario,AS01,AS02,AS03,AS04,AS05"
    );
    let r = json(&dir.join("results.json"));
    assert_eq!(r["as_of"], "2024-06-28");
    assert_eq!(r["confidence"], 0.95);
    assert_eq!(r["assets"].as_array().unwrap().len(), 5);
    for key in [
        "lower",
        "upper",
        "groups",
        "turnover_max",
        "current",
        "cvar_cap",
        "return_floor",
    ] {
        assert!(r["constraints"].get(key).is_some(), "constraints.{key}");
    }
    for name in ["max_return", "min_cvar", "max_ratio"] {
        let mdl = &r["models"][name];
        assert_eq!(mdl["status"], "optimal", "{name}: {mdl}");
        let w: f64 = mdl["weights"]
            .as_object()
            .unwrap()
            .values()
            .map(|v| v.as_f64().unwrap())
            .sum();
        assert!((w - 1.0).abs() < 1e-9, "{name} weights sum {w}");
        assert!(mdl["cvar"].as_f64().unwrap() >= mdl["var"].as_f64().unwrap());
    }
    assert!(
        r["models"]["max_return"]["cvar"].as_f64().unwrap()
            <= r["constraints"]["cvar_cap"].as_f64().unwrap() + 1e-9
    );
    assert!(r["models"]["max_ratio"]["ratio"].as_f64().unwrap() > 0.0);
    let weights = std::fs::read_to_string(dir.join("weights.csv")).unwrap();
    assert_eq!(
        weights.lines().next().unwrap(),
        "asset,class,current,max_return,min_cvar,max_ratio"
    );
    assert_eq!(weights.lines().count(), 6);
    // The first scenario recomputed from the fixture prices: r = P[t+h]/P[t] − 1 with h = 5 (see config()).
    let rows: Vec<Vec<f64>> = m
        .wide_csv()
        .lines()
        .skip(1)
        .map(|l| l.split(',').skip(1).map(|v| v.parse().unwrap()).collect())
        .collect();
    let dates: Vec<&str> = csv
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .next()
        .unwrap()
        .split('/')
        .collect();
    let t = m
        .dates
        .iter()
        .position(|d| d.to_string() == dates[0])
        .unwrap();
    let first: Vec<f64> = csv
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .skip(1)
        .map(|v| v.parse().unwrap())
        .collect();
    for (i, v) in first.iter().enumerate() {
        assert_eq!(
            *v,
            rows[t + 5][i] / rows[t][i] - 1.0,
            "scenario return of asset {i}"
        );
    }
    assert_eq!(m.dates[t + 5].to_string(), dates[1]);
}

/// results.json without what depends on the input files' bytes rather than their figures.
fn without_inputs(mut v: serde_json::Value) -> serde_json::Value {
    let o = v.as_object_mut().unwrap();
    o.remove("inputs");
    o.remove("pack_id");
    o.remove("history");
    // The change section's history names this pack by its id, which depends on the inputs' bytes.
    o.remove("change");
    // The bands' resamples are seeded from the pack id, which changes with the input files' bytes.
    o.remove("bands");
    v
}

#[test]
fn prices_after_as_of_change_nothing() {
    let (f, m) = standard();
    let a = pack_dir(&f.run(&["run", "fund.yaml", "--quiet", "--as-of", "2024-03-28"]));
    let before = without_inputs(json(&a.join("results.json")));
    // Rewrite every price after as-of (×1.7, and one negative value) and add later rows.
    let mut text = String::from("date,AS01,AS02,AS03,AS04,AS05\n");
    for (d, row) in m.dates.iter().zip(&m.prices) {
        let later = d.to_string().as_str() > "2024-03-28";
        let vals: Vec<String> = row
            .iter()
            .enumerate()
            .map(|(i, v)| {
                if later {
                    if i == 2 {
                        "-5".into()
                    } else {
                        format!("{:.6}", v * 1.7)
                    }
                } else {
                    format!("{v:.6}")
                }
            })
            .collect();
        text.push_str(&format!("{d},{}\n", vals.join(",")));
    }
    text.push_str("2024-07-01,1,1,1,1,1\n");
    f.write("data/prices.csv", &text);
    let b = pack_dir(&f.run(&["run", "fund.yaml", "--quiet", "--as-of", "2024-03-28"]));
    assert_eq!(before, without_inputs(json(&b.join("results.json"))));
    assert_eq!(
        std::fs::read(a.join("scenarios.csv")).unwrap().len(),
        std::fs::read(b.join("scenarios.csv")).unwrap().len()
    );
}

#[test]
fn default_as_of_is_the_latest_month_end() {
    let f = Fixture::new();
    let m = Market::new(4, "2021-01-01", "2024-06-18", 3);
    f.small_fund(&m, &config(""));
    let r = json(&pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"));
    assert_eq!(r["as_of"], "2024-05-31");
}

#[test]
fn long_and_wide_layouts_give_the_same_results() {
    let (f, m) = standard();
    let wide = without_inputs(json(
        &pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"),
    ));
    f.write("data/prices.csv", &m.long_csv());
    let mut long = without_inputs(json(
        &pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"),
    ));
    assert_eq!(
        long["data_quality"]["findings"],
        wide["data_quality"]["findings"]
    );
    long.as_object_mut().unwrap().remove("data_quality");
    let mut wide = wide;
    wide.as_object_mut().unwrap().remove("data_quality");
    assert_eq!(long, wide);
}

#[test]
fn decayed_probabilities_add_a_probability_column() {
    let f = Fixture::new();
    let m = Market::new(4, "2021-01-01", "2024-06-28", 8);
    f.small_fund(
        &m,
        &config("").replace("  horizon: 5\n", "  horizon: 5\n  half_life: 120\n"),
    );
    let dir = pack_dir(&f.run(&["run", "fund.yaml", "--quiet"]));
    let csv = std::fs::read_to_string(dir.join("scenarios.csv")).unwrap();
    assert!(csv.starts_with("scenario,probability,AS01"));
    let p: f64 = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap().parse::<f64>().unwrap())
        .sum();
    assert!((p - 1.0).abs() < 1e-12);
}

#[test]
fn riskless_asset_at_full_weight_makes_max_ratio_not_applicable() {
    let f = Fixture::new();
    let mut m = Market::new(3, "2021-01-01", "2024-06-28", 4);
    for (k, row) in m.prices.iter_mut().enumerate() {
        row[0] = 100.0 * (1.0 + 0.0001f64).powi(k as i32);
    }
    m.classes[0] = "cash".into();
    f.small_fund(&m, &config(""));
    f.write(
        "data/assets.csv",
        "asset,class,max_weight\nAS01,cash,1\nAS02,equity,1\nAS03,bond,1\n",
    );
    let r = json(&pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"));
    assert_eq!(r["models"]["max_ratio"]["status"], "not_applicable");
    assert!(
        r["models"]["max_ratio"]["message"]
            .as_str()
            .unwrap()
            .contains("minimum CVaR")
    );
    assert_eq!(r["models"]["min_cvar"]["status"], "optimal");
}

#[test]
fn infeasible_models_name_the_constraint_and_others_still_run() {
    let (f, _) = standard();
    f.write(
        "fund.yaml",
        &config("models:\n  min_cvar:\n    return_floor: { value: 0.5 }\n"),
    );
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    let r = json(&pack_dir(&ran).join("results.json"));
    assert_eq!(r["models"]["min_cvar"]["status"], "infeasible");
    assert!(
        r["models"]["min_cvar"]["message"]
            .as_str()
            .unwrap()
            .contains("return_floor")
    );
    assert_eq!(r["models"]["max_return"]["status"], "optimal");
    // Per-asset bounds that cannot meet the budget are a config error up front (tests/fixtures/bad); a
    // group that its members' bounds cannot fill still makes every model infeasible, naming the group.
    f.write(
        "fund.yaml",
        &config("limits:\n  groups:\n    - { name: Core, assets: [AS01, AS02], min: 0.7 }\n"),
    );
    f.write("data/assets.csv", "asset,class,max_weight\nAS01,equity,0.3\nAS02,bond,0.3\nAS03,equity,1\nAS04,bond,1\nAS05,equity,1\n");
    let r = json(&pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"));
    for name in ["max_return", "min_cvar", "max_ratio"] {
        assert_eq!(r["models"][name]["status"], "infeasible");
        assert!(
            r["models"][name]["message"].as_str().unwrap().contains(
                "group `Core` needs at least 0.7000 but its members' maximum weights sum to 0.6000"
            ),
            "{}",
            r["models"][name]
        );
    }
}

#[test]
fn config_errors_name_key_line_and_suggestion() {
    let (f, _) = standard();
    let cases: &[(&str, &str, &[&str])] = &[
        (
            "scenarios:\n  horizn: 5\n",
            "fund.yaml",
            &["unknown field `horizn`", "line", "did you mean `horizon`?"],
        ),
        (
            "risk:\n  confidence: 1.5\n",
            "fund.yaml",
            &["risk.confidence", "strictly between 0 and 1"],
        ),
        (
            "risk:\n  confidence: high\n",
            "fund.yaml",
            &["risk.confidence", "invalid type"],
        ),
        (
            "limits:\n  groups:\n    - { name: X, assets: [AS01, NOPE] }\n",
            "fund.yaml",
            &["unknown asset `NOPE`"],
        ),
    ];
    for (tail, file, needles) in cases {
        let text = config("").replace("scenarios:\n  horizon: 5\n  lookback_years: 2\n", "") + tail;
        f.write(file, &text);
        let ran = f.run(&["run", file, "--quiet"]);
        assert_eq!(ran.code, 2, "{tail}: {}", ran.stderr);
        for n in *needles {
            assert!(
                ran.stderr.contains(n),
                "{tail}: `{n}` missing from: {}",
                ran.stderr
            );
        }
        assert!(ran.stderr.contains("fund.yaml"));
        assert!(f.entries("out").is_empty(), "no pack folder after an error");
    }
}

#[test]
fn bad_data_names_file_row_and_column_and_leaves_no_pack() {
    let (f, m) = standard();
    let text = with_cell(&m.wide_csv(), 10, 1, "abc");
    f.write("data/prices.csv", &text);
    let ran = f.run(&["check", "fund.yaml"]);
    assert_eq!(ran.code, 3, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("prices.csv")
            && ran.stderr.contains("row 11 (line 12)")
            && ran.stderr.contains("column `AS01`"),
        "{}",
        ran.stderr
    );
    let neg = with_cell(&m.wide_csv(), 20, 1, "-1.0");
    f.write("data/prices.csv", &neg);
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 3);
    assert!(
        ran.stderr.contains("not positive") && ran.stderr.contains("row 21"),
        "{}",
        ran.stderr
    );
    assert!(f.entries("out").is_empty());
}

#[test]
fn check_reports_data_quality() {
    let (f, m) = standard();
    let text = with_cell(&m.wide_csv(), m.dates.len() - 31, 3, "");
    f.write("data/prices.csv", &text);
    let ran = f.run(&["check", "fund.yaml"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(ran.stdout.contains("fill policy: forward-fill up to 3"));
    assert!(
        ran.stdout
            .contains("warn: 1 missing price(s) in the scenario window were filled forward"),
        "{}",
        ran.stdout
    );
}

/// Runs a demo config of `config-demo/` into the fixture's `packs` folder; its output and pack folder.
fn run_demo(f: &Fixture, name: &str) -> (super::common::Ran, std::path::PathBuf) {
    let cfg = repo().join("config-demo").join(name);
    let out = f.path("packs");
    let ran = f.run(&[
        "run",
        cfg.to_str().unwrap(),
        "--quiet",
        "--out",
        out.to_str().unwrap(),
    ]);
    let dir = pack_dir(&ran);
    (ran, dir)
}

#[test]
fn demo_config_builds_a_pack() {
    let f = Fixture::new();
    let (ran, dir) = run_demo(&f, "fund.yaml");
    let r = json(&dir.join("results.json"));
    assert_eq!(r["as_of"], "2026-11-30");
    assert_eq!(r["assets"].as_array().unwrap().len(), 50);
    for name in ["max_return", "min_cvar", "max_ratio"] {
        assert_eq!(
            r["models"][name]["status"], "optimal",
            "{name}: {}",
            r["models"][name]
        );
    }
    assert!(ran.stdout.contains("Orrin Hollow"));
    // The pension fund measures its liabilities: funded ratio = fund value / liabilities' present value,
    // both as fund.yaml states them (2,350,000,000 / 2,475,000,000).
    let funded = r["liabilities"]["funded_ratio"].as_f64().unwrap();
    assert!((funded - 2.35 / 2.475).abs() < 1e-12, "{funded}");
    assert_eq!(r["liabilities"]["proxy"], "REF-LIAB");
}

/// The second demo config: an asset-only foundation on the same data files, which leaves the pension
/// fund's liability proxy out of its run (`data.skip_columns`); without that key the column would be an
/// asset without a metadata row.
#[test]
fn the_asset_only_demo_config_builds_a_pack_without_liabilities() {
    let f = Fixture::new();
    let (_, dir) = run_demo(&f, "foundation.yaml");
    let (out, cfg) = (f.path("packs"), repo().join("config-demo/foundation.yaml"));
    let r = json(&dir.join("results.json"));
    assert!(r["liabilities"].is_null(), "{}", r["liabilities"]);
    assert_eq!(r["assets"].as_array().unwrap().len(), 50);
    for name in ["max_return", "min_cvar", "max_ratio"] {
        assert_eq!(r["models"][name]["status"], "optimal", "{name}");
    }
    let reference = std::fs::read_to_string(dir.join("reference-scenarios.csv")).unwrap();
    assert!(
        !reference.contains("REF-LIAB"),
        "the skipped column is not a series of the run"
    );
    // The same config without the key, its paths made absolute so it runs from the fixture's folder.
    let data = repo().join("config-demo");
    let text = std::fs::read_to_string(&cfg)
        .unwrap()
        .replace("  skip_columns: [REF-LIAB]", "")
        .replace("data/", &format!("{}/data/", data.display()))
        .replace(
            "stress-foundation.yaml",
            &data.join("stress-foundation.yaml").display().to_string(),
        );
    let copy = f.write("foundation.yaml", &text);
    let ran = f.run(&[
        "run",
        copy.to_str().unwrap(),
        "--quiet",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(ran.code, 3, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("REF-LIAB") && ran.stderr.contains("data.skip_columns"),
        "{}",
        ran.stderr
    );
}

/// Writes the market as a wide Parquet file with a Date-typed `date` column and Float64 prices.
fn write_parquet(m: &Market, path: &std::path::Path) {
    use polars::prelude::*;
    let dates: Vec<String> = m.dates.iter().map(|d| d.to_string()).collect();
    let mut cols = vec![
        Column::new("date".into(), dates)
            .cast(&DataType::Date)
            .unwrap(),
    ];
    for (i, a) in m.assets.iter().enumerate() {
        // Rounded like the CSV fixture (6 decimals) so both files hold the same numbers.
        let v: Vec<f64> = m
            .prices
            .iter()
            .map(|r| format!("{:.6}", r[i]).parse().unwrap())
            .collect();
        cols.push(Column::new(a.as_str().into(), v));
    }
    let mut df = DataFrame::new_infer_height(cols).unwrap();
    ParquetWriter::new(std::fs::File::create(path).unwrap())
        .finish(&mut df)
        .unwrap();
}

#[test]
fn parquet_prices_give_the_same_results_as_csv() {
    let (f, m) = standard();
    let csv = without_inputs(json(
        &pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"),
    ));
    write_parquet(&m, &f.path("data/prices.parquet"));
    f.write(
        "fund.yaml",
        &std::fs::read_to_string(f.path("fund.yaml"))
            .unwrap()
            .replace("prices.csv", "prices.parquet"),
    );
    let pq = without_inputs(json(
        &pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"),
    ));
    assert_eq!(csv["models"], pq["models"]);
    assert_eq!(csv["current"], pq["current"]);
    // A truncated Parquet file is a data error naming the file.
    let bytes = std::fs::read(f.path("data/prices.parquet")).unwrap();
    std::fs::write(f.path("data/prices.parquet"), &bytes[..bytes.len() / 2]).unwrap();
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 3, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("prices.parquet") && ran.stderr.contains("Parquet"),
        "{}",
        ran.stderr
    );
}

#[test]
fn missing_input_file_is_a_config_error_naming_the_key() {
    let (f, _) = standard();
    std::fs::remove_file(f.path("data/holdings.csv")).unwrap();
    let ran = f.run(&["check", "fund.yaml"]);
    assert_eq!(ran.code, 2);
    assert!(
        ran.stderr.contains("data.holdings")
            && ran.stderr.contains("holdings.csv")
            && ran.stderr.contains("does not exist"),
        "{}",
        ran.stderr
    );
}

/// The fixture's wide CSV with `edit(row index, cells)` applied to each data row.
fn edit_rows(m: &Market, edit: impl Fn(usize, &mut Vec<String>)) -> String {
    edit_csv_rows(&m.wide_csv(), edit)
}

fn check_out(f: &Fixture) -> super::common::Ran {
    f.run(&["check", "fund.yaml"])
}

#[test]
fn data_quality_findings_each_have_their_outcome() {
    let (f, m) = standard();
    let n = m.dates.len();
    // Duplicate date: error naming both rows.
    let dup = edit_rows(&m, |i, c| {
        if i == n - 40 {
            c[0] = m.dates[n - 41].to_string()
        }
    });
    f.write("data/prices.csv", &dup);
    let ran = check_out(&f);
    assert_eq!(ran.code, 3);
    assert!(
        ran.stderr
            .contains(&format!("date {} appears twice", m.dates[n - 41]))
            && ran.stderr.contains(&format!("row {}", n - 40)),
        "{}",
        ran.stderr
    );
    // Stale run of 12 identical prices in AS02 and one extreme move in AS03: warnings, run continues.
    let stale = edit_rows(&m, |i, c| {
        if (n - 60..n - 48).contains(&i) {
            c[2] = "123.000000".into();
        }
        if i == n - 30 {
            c[3] = format!("{:.6}", m.prices[i][2] * 1.5);
        }
    });
    f.write("data/prices.csv", &stale);
    let ran = check_out(&f);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(
        ran.stdout.contains("warn: stale prices")
            && ran.stdout.contains("`AS02` (12 identical prices in a row)"),
        "{}",
        ran.stdout
    );
    assert!(
        ran.stdout.contains("warn: single-period moves beyond ±25%")
            && ran.stdout.contains("`AS03` (2×)"),
        "{}",
        ran.stdout
    );
    // A gap of 5 missing prices (> max_fill 3) drops the asset with a warning.
    let gap = edit_rows(&m, |i, c| {
        if (n - 20..n - 15).contains(&i) {
            c[4] = String::new();
        }
    });
    f.write("data/prices.csv", &gap);
    let ran = check_out(&f);
    // Still held: a blocking error, because the current portfolio's risk cannot be measured without it.
    assert_eq!(ran.code, 3);
    assert!(
        ran.stderr
            .contains("asset `AS04` is not in the price data (or was dropped by the fill policy)"),
        "{}",
        ran.stderr
    );
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.25\nAS02,0.25\nAS03,0.25\nAS05,0.25\n",
    );
    let ran = check_out(&f);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(ran.stdout.contains("asset `AS04` has a gap of 5 consecutive missing prices, more than quality.max_fill = 3; it is dropped"), "{}", ran.stdout);
}

#[test]
fn unsorted_rows_are_sorted_with_a_warning_and_change_nothing() {
    let (f, m) = standard();
    let sorted = without_inputs(json(
        &pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"),
    ));
    let text = m.wide_csv();
    let mut lines: Vec<&str> = text.lines().collect();
    lines.swap(100, 101);
    f.write("data/prices.csv", &(lines.join("\n") + "\n"));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert!(
        ran.stdout.contains("rows are not in date order"),
        "{}",
        ran.stdout
    );
    let mut unsorted = without_inputs(json(&pack_dir(&ran).join("results.json")));
    for v in [&mut unsorted] {
        let o = v.as_object_mut().unwrap();
        o.remove("checks");
        o.remove("data_quality");
    }
    let mut sorted = sorted;
    sorted.as_object_mut().unwrap().remove("checks");
    sorted.as_object_mut().unwrap().remove("data_quality");
    assert_eq!(unsorted, sorted);
}

#[test]
fn short_history_for_the_universe_is_flagged() {
    // Rule of thumb (common practice): ≥ 10 observations per asset and ≥ as many non-overlapping windows as
    // assets. 12 assets, horizon 21, one year of data: about 260 observations, 12 windows → flagged? 260 ≥ 120
    // passes the first rule; 260/21 = 12 windows ≥ 12 assets passes too, so use 30 assets instead.
    let f = Fixture::new();
    let m = Market::new(30, "2023-06-01", "2024-06-28", 5);
    f.small_fund(&m, &config("").replace("horizon: 5", "horizon: 21"));
    let ran = f.run(&["check", "fund.yaml"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(
        ran.stdout
            .contains("warn: history is short for the universe"),
        "{}",
        ran.stdout
    );
}

#[test]
fn excluded_assets_get_zero_weight_in_every_model() {
    let (f, _) = standard();
    f.write("fund.yaml", &config("limits:\n  exclude: [AS05]\n"));
    let r = json(&pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("results.json"));
    for name in ["max_return", "min_cvar", "max_ratio"] {
        assert_eq!(r["models"][name]["status"], "optimal");
        assert_eq!(r["models"][name]["weights"]["AS05"], 0.0, "{name}");
    }
    assert_eq!(r["constraints"]["upper"]["AS05"], 0.0);
    f.write("fund.yaml", &config("limits:\n  exclude: [AS99]\n"));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 2);
    assert!(
        ran.stderr.contains("limits.exclude: unknown asset `AS99`"),
        "{}",
        ran.stderr
    );
}

/// `check` applies the price-range bound as `run` does (README, "Data quality"): a price 10^6 times or more
/// away from the rest of its column, early in the history (before a 1-year scenario window, where only the
/// backtest and the historical stress windows would read it) or in the window, is exit 3 naming the cell;
/// just under the bound it passes with the extreme-move warning.
#[test]
fn check_and_run_refuse_prices_a_millionfold_apart_anywhere_in_the_history() {
    let (f, m) = standard();
    f.write(
        "fund.yaml",
        &config("").replace("lookback_years: 2", "lookback_years: 1"),
    );
    let n = m.dates.len();
    for (row, factor, blocks) in [(10, 1e7, true), (n - 30, 1e-7, true), (n - 30, 2e5, false)] {
        let at = |i: usize, c: &mut Vec<String>| {
            if i == row {
                c[3] = format!("{:e}", m.prices[i][2] * factor);
            }
        };
        f.write("data/prices.csv", &edit_rows(&m, at));
        for cmd in ["check", "run"] {
            let ran = f.run(&[cmd, "fund.yaml", "--quiet"][..if cmd == "check" { 2 } else { 3 }]);
            if blocks {
                assert_eq!(ran.code, 3, "{cmd} {row} {factor}: {}", ran.stderr);
                let place = format!("row {} (line {}), column `AS03`", row + 1, row + 2);
                assert!(ran.stderr.contains(&place), "{place}: {}", ran.stderr);
                assert!(
                    ran.stderr.contains(&m.dates[row].to_string()),
                    "{}",
                    ran.stderr
                );
            } else {
                assert!(ran.code == 0 || ran.code == 5, "{cmd}: {}", ran.stderr);
                assert!(ran.stdout.contains("`AS03` (2×)"), "{}", ran.stdout);
            }
        }
    }
}
