//! The pack's "Trades and costs" section read back by poppler's pdftotext (outside the project) and checked
//! against figures recomputed here from `weights.csv`, the config's cost rates and `results.json`: each
//! trade = value × (x_i − current_i), largest first, the smaller ones summed; and the cost of a trade list =
//! Σ rate_i × |x_i − current_i| × value (issue 16, "Trades and costs"). Every figure is formatted by the
//! README rule ("Figures as printed"), written out here independently of the library.

use super::common::{Fixture, Market, json, pdf_text, squeeze, weights_csv};
use std::collections::BTreeMap;
use std::path::Path;

/// The models in the order the pack prints them (README, "The PDF pack").
const MODELS: [(&str, &str); 3] = [
    ("max_return", "Max return"),
    ("min_cvar", "Min CVaR"),
    ("max_ratio", "Max ratio"),
];

/// How many trades a list prints one by one (README, "The PDF pack": the ten largest, the rest summed).
const LISTED: usize = 10;

/// A weight change this small prints as 0.00 pp and rounds to no money at any fund size the pack shows:
/// solver round-off, not a trade.
const NO_TRADE: f64 = 1e-6;

/// An amount in whole currency units with thousands separators; `signed` puts `+` before a purchase;
/// U+2212 before a sale; an amount rounding to zero is `0` (README, "Figures as printed").
fn money(x: f64, signed: bool) -> String {
    let whole = format!("{:.0}", x.abs().round());
    let mut grouped = String::new();
    for (i, ch) in whole.chars().enumerate() {
        if i > 0 && (whole.len() - i) % 3 == 0 {
            grouped.push(',');
        }
        grouped.push(ch);
    }
    let sign = match () {
        _ if whole == "0" => "",
        _ if x < 0.0 => "\u{2212}",
        _ if signed => "+",
        _ => "",
    };
    format!("{sign}{grouped}")
}

/// A difference of weights in percentage points, two decimals, always signed.
fn points(x: f64) -> String {
    let digits = format!("{:.2}", (x * 100.0).abs());
    let sign = match () {
        _ if digits == "0.00" => "",
        _ if x < 0.0 => "\u{2212}",
        _ => "+",
    };
    format!("{sign}{digits} pp")
}

/// A fraction as a percentage with two decimals; `signed` for returns.
fn percent(x: f64, signed: bool) -> String {
    let digits = format!("{:.2}", (x * 100.0).abs());
    let sign = match () {
        _ if digits == "0.00" => "",
        _ if x < 0.0 => "\u{2212}",
        _ if signed => "+",
        _ => "",
    };
    format!("{sign}{digits}%")
}

/// The squeezed lines of the section numbered `n` ("4 Trades and costs" in a first pack without liabilities, up
/// to the next section's title).
fn section(text: &str, n: usize) -> Vec<String> {
    let lines: Vec<String> = text
        .lines()
        .map(squeeze)
        .filter(|l| !l.is_empty())
        .collect();
    let start = lines
        .iter()
        .position(|l| *l == format!("{n} Trades and costs"))
        .unwrap_or_else(|| panic!("no section `{n} Trades and costs` in the PDF"));
    let end = lines[start..]
        .iter()
        .position(|l| *l == format!("{} Tail loss", n + 1))
        .map_or(lines.len(), |e| start + e);
    lines[start..end].to_vec()
}

/// The lines of one model's trade list ("Trades to <label>" up to the next list or the section's end).
fn list<'a>(section: &'a [String], label: &str) -> &'a [String] {
    let start = section
        .iter()
        .position(|l| *l == format!("Trades to {label}"))
        .unwrap_or_else(|| panic!("no trade list for {label}"));
    let end = section[start + 1..]
        .iter()
        .position(|l| l.starts_with("Trades to "))
        .map_or(section.len(), |e| start + 1 + e);
    &section[start + 1..end]
}

/// Asserts that some line of the section reads exactly `want`.
fn has_row(section: &[String], want: &str) {
    assert!(
        section.iter().any(|r| r == want),
        "no row reads `{want}` in:\n{}",
        section.join("\n")
    );
}

/// One model's trades as the test works them out: (asset, weight change), every asset whose weight moves.
fn changes(w: &BTreeMap<String, BTreeMap<String, f64>>, model: &str) -> Vec<(String, f64)> {
    let current = &w["current"];
    w[model]
        .iter()
        .map(|(a, x)| (a.clone(), x - current[a]))
        .filter(|(_, d)| d.abs() >= NO_TRADE)
        .collect()
}

/// A printed trade row: its asset and its words.
type Row = (String, Vec<String>);

/// The printed rows of a list: the listed trades and the summed line's words.
fn printed_rows(lines: &[String], assets: &[String]) -> (Vec<Row>, Option<Vec<String>>) {
    let tokens = |l: &str| l.split(' ').map(str::to_string).collect::<Vec<_>>();
    let rows = lines
        .iter()
        .filter_map(|l| {
            let first = l.split(' ').next()?;
            assets
                .iter()
                .any(|a| a == first)
                .then(|| (first.to_string(), tokens(l)))
        })
        .collect();
    let rest = lines
        .iter()
        .find(|l| l.contains(" smaller trades "))
        .map(|l| tokens(l));
    (rows, rest)
}

/// The checks every trade list must pass, money or not: the listed trades are the largest, in decreasing
/// order, each with its weight change; the summed line counts and sums the rest. Returns the listed assets.
fn check_list(
    lines: &[String],
    label: &str,
    mut trades: Vec<(String, f64)>,
    assets: &[String],
) -> Vec<String> {
    trades.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()));
    let (rows, rest) = printed_rows(lines, assets);
    let want_listed = if trades.len() > LISTED + 1 {
        LISTED
    } else {
        trades.len()
    };
    assert_eq!(rows.len(), want_listed, "{label}: listed trades");
    let change = |a: &str| trades.iter().find(|t| t.0 == a).map(|t| t.1);
    let mut listed = Vec::new();
    for (asset, tok) in &rows {
        let d =
            change(asset).unwrap_or_else(|| panic!("{label}: {asset} is listed but not traded"));
        let n = tok.len();
        let pp_at = tok.iter().rposition(|t| t == "pp").expect("a change in pp");
        assert_eq!(
            tok[pp_at - 1..=pp_at].join(" "),
            points(d),
            "{label}: change of {asset} ({tok:?})"
        );
        assert!(pp_at == n - 1 || pp_at == n - 2, "{label}: {tok:?}");
        listed.push(asset.clone());
    }
    // Largest first: the listed changes never grow down the list, and no unlisted trade is larger than
    // the smallest listed one (weights.csv to full precision, compared at 1e-12 below printed figures).
    let sizes: Vec<f64> = listed.iter().map(|a| change(a).unwrap().abs()).collect();
    assert!(
        sizes.windows(2).all(|p| p[0] >= p[1] - 1e-12),
        "{label}: not largest first: {listed:?}"
    );
    let unlisted: Vec<&(String, f64)> = trades.iter().filter(|t| !listed.contains(&t.0)).collect();
    if let (Some(min), Some(max)) = (
        sizes.iter().copied().reduce(f64::min),
        unlisted.iter().map(|t| t.1.abs()).reduce(f64::max),
    ) {
        assert!(
            min >= max - 1e-12,
            "{label}: an unlisted trade ({max}) is larger than a listed one ({min})"
        );
    }
    match rest {
        None => assert!(
            unlisted.is_empty(),
            "{label}: {} trades neither listed nor summed",
            unlisted.len()
        ),
        Some(tok) => {
            assert_eq!(
                tok[..3].join(" "),
                format!("{} smaller trades", unlisted.len()),
                "{label}"
            );
            let sum: f64 = unlisted.iter().map(|t| t.1).sum();
            let pp_at = tok.iter().rposition(|t| t == "pp").unwrap();
            assert_eq!(
                tok[pp_at - 1..=pp_at].join(" "),
                points(sum),
                "{label}: summed change"
            );
        }
    }
    listed
}

/// The demo pack's section 5 (4 without its liabilities section) against `weights.csv` and `results.json`:
/// called from the suite's demo-pack test (`report::pdf_has_every_section_and_the_figures_of_results_json`)
/// so the demo runs once.
pub(super) fn demo_section_matches_results_json(text: &str, pack: &Path) {
    let r = json(&pack.join("results.json"));
    let w = weights_csv(pack);
    let v = r["fund_value"].as_f64().expect("the demo fund has a value");
    let ccy = r["base_currency"].as_str().unwrap();
    let lines = section(text, 5);
    let assets: Vec<String> = w["current"].keys().cloned().collect();
    let rate = |a: &str| r["costs"]["rates"][a].as_f64().unwrap();
    let mut row = BTreeMap::<&str, Vec<String>>::new();
    for (key, label) in MODELS {
        let m = &r["models"][key];
        let trades = changes(&w, key);
        // results.json `trades` names the same assets, each amount value × weight change.
        let amounts = r["trades"][key].as_object().unwrap();
        assert_eq!(amounts.len(), trades.len(), "{key}: results.json trades");
        for (a, d) in &trades {
            let got = amounts[a].as_f64().unwrap();
            assert!(
                (got - v * d).abs() < 1e-6 * v,
                "{key} {a}: {got} vs {}",
                v * d
            );
        }
        // Trade amounts sum to zero within rounding (issue 16, Tests): the weights sum to one before and after.
        let net: f64 = trades.iter().map(|t| v * t.1).sum();
        assert!(net.abs() < 1.0, "{key}: trades sum to {net}");
        let block = list(&lines, label);
        let listed = check_list(block, label, trades.clone(), &assets);
        // Each listed amount = value × weight change, rounded as printed, in the last column.
        let (rows, rest) = printed_rows(block, &assets);
        for (asset, tok) in &rows {
            let d = trades.iter().find(|t| t.0 == *asset).unwrap().1;
            assert_eq!(
                tok.last().unwrap(),
                &money(v * d, true),
                "{key}: amount of {asset}"
            );
        }
        let printed: Vec<f64> = rows
            .iter()
            .map(|(_, t)| {
                t.last()
                    .unwrap()
                    .replace(['+', ','], "")
                    .replace('\u{2212}', "-")
                    .parse::<f64>()
                    .unwrap()
            })
            .collect();
        assert!(
            printed.windows(2).all(|p| p[0].abs() >= p[1].abs()),
            "{key}: amounts not in decreasing size: {printed:?}"
        );
        let rest_sum: f64 = trades
            .iter()
            .filter(|t| !listed.contains(&t.0))
            .map(|t| v * t.1)
            .sum();
        if let Some(tok) = rest {
            assert_eq!(
                tok.last().unwrap(),
                &money(rest_sum, true),
                "{key}: the smaller trades' sum"
            );
        }
        // Cost of the trade list = Σ rate_i × |x_i − current_i| × value (issue 16, "Trades and costs").
        let cost: f64 = trades.iter().map(|(a, d)| rate(a) * d.abs()).sum();
        let reported = m["cost"].as_f64().unwrap();
        assert!(
            (cost - reported).abs() < 1e-12,
            "{key}: cost {reported} vs Σ rate × |Δw| = {cost}"
        );
        let bought: f64 = trades.iter().filter(|t| t.1 > 0.0).map(|t| v * t.1).sum();
        let sold: f64 = trades.iter().filter(|t| t.1 < 0.0).map(|t| -v * t.1).sum();
        let turnover: f64 = trades.iter().map(|t| t.1.abs()).sum();
        let n_bought = trades.iter().filter(|t| t.1 > 0.0).count();
        for (what, cell) in [
            (
                "Number of trades",
                format!(
                    "{}: {n_bought} bought, {} sold",
                    trades.len(),
                    trades.len() - n_bought
                ),
            ),
            ("Bought", format!("{ccy} {}", money(bought, false))),
            ("Sold", format!("{ccy} {}", money(sold, false))),
            (
                "Gross traded value (bought + sold)",
                format!("{ccy} {}", money(bought + sold, false)),
            ),
            ("Turnover Σ|weight change|", percent(turnover, false)),
            (
                "Transaction cost (basis points of the fund)",
                format!("{:.1} bps", cost * 1e4),
            ),
            (
                "Transaction cost in money",
                format!("{ccy} {}", money(cost * v, false)),
            ),
            (
                "Expected return before costs",
                percent(m["expected_return"].as_f64().unwrap(), true),
            ),
            (
                "Expected return net of costs",
                percent(m["expected_return_net"].as_f64().unwrap(), true),
            ),
        ] {
            row.entry(what).or_default().push(cell);
        }
    }
    for (what, cells) in row {
        has_row(&lines, &format!("{what} {}", cells.join(" ")));
    }
    let flat = lines.join(" ");
    assert!(
        flat.contains(&format!("at the fund's value of {ccy} {}", money(v, false))),
        "money basis sentence"
    );
    assert!(
        flat.contains("cost = Σ rate × |weight change| × value"),
        "cost rule sentence"
    );
}

/// A fund of 14 assets (alternating equity and bond, equal current weights) with cost rates (equity 20 bp,
/// bond 8 bp) and the `fund` section's extra lines, so the max-return model trades more than ten assets;
/// `floor` is the min-CVaR model's expected-return floor.
fn fund(f: &Fixture, fund: &str, costs: bool, floor: f64) {
    let m = Market::new(14, "2021-01-01", "2024-06-28", 43);
    let costs = if costs {
        "costs:\n  class_bps: { equity: 20, bond: 8 }\n"
    } else {
        ""
    };
    f.small_fund(&m, &format!(
        "fund:\n  name: Trade Test Fund (fictional)\n{fund}data:\n  prices: data/prices.csv\n  assets: data/assets.csv\n  holdings: data/holdings.csv\nscenarios:\n  horizon: 5\n  lookback_years: 2\nmodels:\n  max_return:\n    cvar_cap: {{ times_min: 1.5 }}\n  min_cvar:\n    return_floor: {{ value: {floor} }}\n{costs}analysis:\n  frontier_points: 2\n  backtest_years: 0\n  daily_var_check: false\noutput:\n  root: out\n"
    ));
}

fn run(f: &Fixture) -> std::path::PathBuf {
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    std::path::PathBuf::from(ran.stdout.lines().last().unwrap())
}

#[test]
fn without_a_fund_value_trades_are_weight_changes_and_costs_basis_points() {
    let f = Fixture::new();
    fund(&f, "", true, 0.0);
    let pack = run(&f);
    let r = json(&pack.join("results.json"));
    assert!(r["fund_value"].is_null() && r["trades"].is_null());
    let lines = section(&pdf_text(&pack.join("pack.pdf")), 4);
    let flat = lines.join(" ");
    assert!(
        flat.contains("amounts in money need `fund.value` and `fund.base_currency` in the config"),
        "the note on what is missing: {flat}"
    );
    for absent in [
        "Amount (",
        "XTS",
        "n/a",
        "Bought",
        "Gross traded value",
        "Transaction cost in money",
    ] {
        assert!(
            !flat.contains(absent),
            "`{absent}` printed without a fund value:\n{}",
            lines.join("\n")
        );
    }
    let w = weights_csv(&pack);
    let assets: Vec<String> = w["current"].keys().cloned().collect();
    // The config's own rates (basis points / 10,000); the assets alternate equity and bond from AS01.
    let rate = |a: &str| {
        let i: usize = a[2..].parse().unwrap();
        if i % 2 == 1 { 0.0020 } else { 0.0008 }
    };
    let mut cells = Vec::new();
    let mut summed = false;
    for (key, label) in MODELS {
        let trades = changes(&w, key);
        let block = list(&lines, label);
        check_list(block, label, trades.clone(), &assets);
        for l in block.iter().filter(|l| {
            l.split(' ')
                .next()
                .is_some_and(|a| assets.iter().any(|x| x == a))
        }) {
            assert!(
                l.ends_with(" pp"),
                "{label}: a row without a fund value ends in its change: {l}"
            );
        }
        summed |= trades.len() > LISTED + 1;
        // Cost = Σ rate_i × |x_i − current_i| (× value, here the fund's value as the unit; issue 16).
        let cost: f64 = trades.iter().map(|(a, d)| rate(a) * d.abs()).sum();
        cells.push(format!("{:.1} bps", cost * 1e4));
    }
    assert!(
        summed,
        "some model trades more than {} assets, so a summed line is printed",
        LISTED + 1
    );
    has_row(
        &lines,
        &format!(
            "Transaction cost (basis points of the fund) {}",
            cells.join(" ")
        ),
    );
}

/// Also a model without a solution: a 50% expected return over five observations is out of reach, so
/// min CVaR is infeasible and has no trades.
#[test]
fn without_cost_rates_trades_are_shown_free_of_cost() {
    let f = Fixture::new();
    fund(&f, "  value: 40000000\n  base_currency: XTS\n", false, 0.5);
    let pack = run(&f);
    let lines = section(&pdf_text(&pack.join("pack.pdf")), 4);
    let flat = lines.join(" ");
    assert!(
        flat.contains("so the trades are shown free of cost"),
        "{flat}"
    );
    for absent in ["Transaction cost", "Rate (bps)", "net of costs"] {
        assert!(
            !flat.contains(absent),
            "`{absent}` printed without cost rates"
        );
    }
    assert!(
        flat.contains("Amount (XTS)"),
        "amounts are in money with a fund value"
    );
    let w = weights_csv(&pack);
    let r = json(&pack.join("results.json"));
    assert_eq!(
        r["models"]["min_cvar"]["status"], "infeasible",
        "the fixture makes min CVaR infeasible"
    );
    let cells: Vec<String> = MODELS
        .iter()
        .map(|(k, _)| {
            r["models"][*k]["expected_return"]
                .as_f64()
                .map_or("\u{2014}".into(), |x| percent(x, true))
        })
        .collect();
    has_row(
        &lines,
        &format!("Expected return (no costs) {}", cells.join(" ")),
    );
    assert_eq!(
        list(&lines, "Min CVaR").first().map(String::as_str),
        Some("The model has no solution, so there is nothing to trade."),
        "a model without a solution says so in its list"
    );
    let (rows, _) = printed_rows(
        list(&lines, "Max return"),
        &w["current"].keys().cloned().collect::<Vec<_>>(),
    );
    let trades = changes(&w, "max_return");
    for (asset, tok) in rows {
        let d = trades.iter().find(|t| t.0 == asset).unwrap().1;
        assert_eq!(
            tok.last().unwrap(),
            &money(40_000_000.0 * d, true),
            "amount of {asset}"
        );
    }
}

/// Without holdings there is nothing to trade from: the section says so in one sentence.
pub(super) fn says_there_is_nothing_to_trade_from(flat: &str) {
    assert!(
        flat.contains("No current holdings were given (data.holdings), so there are no trades"),
        "the trades section must say why it is empty"
    );
}
