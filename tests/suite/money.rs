//! Money and years in the committee PDF, read back by poppler's pdftotext (a tool outside the project):
//! every amount printed is the fund value of results.json × the fraction results.json holds, rounded to
//! whole units and written by the README's rule for money (thousands separators, U+2212 as minus), and an
//! annualised expected return is the horizon figure × the horizons in a year of results.json. A fund without
//! a value or a policy gets the pack in fractions with notes saying what is missing.

use super::common::{Fixture, Market, config, json, pdf_text, repo, squeeze};
use serde_json::Value;
use std::path::PathBuf;

fn pack_dir(ran: &super::common::Ran) -> PathBuf {
    assert_eq!(ran.code, 0, "stderr: {}", ran.stderr);
    PathBuf::from(ran.stdout.lines().last().expect("stdout has lines"))
}

/// The README's rule for percentages, written out here independently of the library.
fn printed(x: f64, signed: bool) -> String {
    let digits = format!("{:.2}", (x * 100.0).abs());
    if digits == "0.00" {
        return "0.00%".into();
    }
    let sign = match () {
        _ if x < 0.0 => "\u{2212}",
        _ if signed => "+",
        _ => "",
    };
    format!("{sign}{digits}%")
}

/// The README's rule for money, written out here independently of the library: whole units (rounded half
/// away from zero), commas between groups of three digits, U+2212 before a loss of money, `+` before a
/// positive return when `signed`.
fn amount(x: f64, signed: bool) -> String {
    let whole = x.abs().round() as u64;
    let digits = whole.to_string();
    let mut grouped = String::new();
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            grouped.push(',');
        }
        grouped.push(ch);
    }
    let sign = match () {
        _ if whole == 0 => "",
        _ if x < 0.0 => "\u{2212}",
        _ if signed => "+",
        _ => "",
    };
    format!("{sign}{grouped}")
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("a number, got {v}"))
}

/// The figures of a level (0.95) in a results.json `levels` list.
fn at_level(levels: &Value, c: f64) -> &Value {
    levels
        .as_array()
        .unwrap()
        .iter()
        .find(|l| (f(&l["level"]) - c).abs() < 1e-12)
        .expect("the level is reported")
}

#[test]
fn the_demo_pack_prints_amounts_as_fund_value_times_the_fractions_of_results_json() {
    let f_ = Fixture::new();
    let cfg = repo().join("config-demo/fund.yaml");
    let dir = pack_dir(&f_.run(&["run", cfg.to_str().unwrap(), "--out", "out", "--quiet"]));
    let r = json(&dir.join("results.json"));
    let text = pdf_text(&dir.join("pack.pdf"));
    let flat = squeeze(&text);
    let (value, code, c) = (
        f(&r["fund_value"]),
        r["base_currency"].as_str().unwrap(),
        f(&r["confidence"]),
    );
    assert!(value > 0.0, "the demo fund has a value");
    // The current portfolio's VaR and CVaR in the summary's key point, each with its amount.
    let cur = &r["current"];
    let (var, cvar) = (
        f(&at_level(&cur["levels"], c)["var"]),
        f(&at_level(&cur["levels"], c)["cvar"]),
    );
    let cvar_money = format!("{code} {}", amount(value * cvar, false));
    let point = format!(
        "VaR {} ({code} {}) and CVaR {} ({cvar_money}) at 95%.",
        printed(var, false),
        amount(value * var, false),
        printed(cvar, false)
    );
    assert!(flat.contains(&point), "summary point `{point}` missing");
    assert!(
        text.matches(&cvar_money).count() >= 2,
        "current CVaR {cvar_money} must be on the cover and in the summary"
    );
    // Every level of the tail table: the amount of VaR and CVaR beside the percentage.
    for l in cur["levels"].as_array().unwrap() {
        for key in ["var", "cvar"] {
            let want = amount(value * f(&l[key]), false);
            assert!(
                text.contains(&want),
                "current {key} at {} as {want}",
                l["level"]
            );
        }
    }
    // The expected return a year: the horizon figure × the horizons in a year (simple, not compounded).
    let per_year = f(&r["policy"]["horizons_per_year"]);
    let er = f(&cur["expected_return"]);
    let annual = format!(
        "expected return {} over one horizon ({} a year)",
        printed(er, true),
        printed(er * per_year, true)
    );
    assert!(flat.contains(&annual), "`{annual}` missing");
    // Each model's cost (bps and money) and active risk (tracking error a year, active CVaR) in its key point.
    for (key, label) in [
        ("max_return", "Max return"),
        ("min_cvar", "Min CVaR"),
        ("max_ratio", "Max ratio"),
    ] {
        let cost = f(&r["models"][key]["cost"]);
        let a = &r["policy"]["active"][key];
        let (te, acvar) = (f(&a["tracking_error_annualised"]), f(&a["active_cvar"]));
        let want = format!(
            "Transaction cost {:.1} bps ({code} {}); against the policy benchmark, tracking error {} ({code} {}) a year and active CVaR 95% {} ({code} {}) over one horizon.",
            cost * 10_000.0,
            amount(value * cost, false),
            printed(te, false),
            amount(value * te, false),
            printed(acvar, false),
            amount(value * acvar, false)
        );
        assert!(flat.contains(&want), "{label}: `{want}` missing");
    }
    // The current portfolio's range breaches with their figures, and how far outside in money.
    let p = &r["policy"];
    for b in p["portfolios"]["current"]["breaches"].as_array().unwrap() {
        let i = p["lines"]
            .as_array()
            .unwrap()
            .iter()
            .position(|l| l["name"] == *b)
            .unwrap();
        let line = &p["lines"][i];
        let e = f(&p["portfolios"]["current"]["exposure"][i]);
        let (min, max) = (f(&line["min"]), f(&line["max"]));
        let (gap, side) = if e < min {
            (min - e, "below")
        } else {
            (e - max, "above")
        };
        let want = format!(
            "Policy: the current portfolio is outside its permitted range in {} at {} (target {}, range {}–{}; {}, {code} {} {side} the range)",
            b.as_str().unwrap(),
            printed(e, false),
            printed(f(&line["target"]), false),
            printed(min, false),
            printed(max, false),
            printed(gap, false),
            amount(value * gap, false)
        );
        assert!(flat.contains(&want), "breach point `{want}` missing");
    }
    // Stress P&L of the current portfolio under every shock, signed, in money.
    for x in r["stress"]["portfolios"]["current"]["pnl"]
        .as_array()
        .unwrap()
    {
        let want = amount(value * f(x), true);
        assert!(text.contains(&want), "current stress P&L {want} missing");
    }
    // The active CVaR of every portfolio on the policy page, in money.
    for (key, a) in p["active"].as_object().unwrap() {
        let want = amount(value * f(&a["active_cvar"]), false);
        assert!(text.contains(&want), "{key}: active CVaR {want} missing");
    }
    for missing in [
        "No fund value is configured",
        "no policy portfolio is configured",
    ] {
        assert!(!flat.contains(missing), "the demo has a value and a policy");
    }
}

/// A small fund's config: `fund` holds `extra` after its name.
fn small_config(extra: &str) -> String {
    config("").replacen(
        "fund:\n  name: Test Fund (fictional)\n",
        &format!("fund:\n  name: Test Fund (fictional)\n{extra}"),
        1,
    )
}

/// The summary page of a pack's text (section 1 up to section 2; the first "1 Summary" is in the contents).
fn summary_page(text: &str) -> String {
    let flat = squeeze(text);
    let (start, _) = flat.match_indices("1 Summary").nth(1).expect("a summary");
    let end = flat[start..]
        .find("2 Position against policy")
        .map_or(flat.len(), |i| start + i);
    flat[start..end].to_string()
}

#[test]
fn a_fund_without_value_or_policy_gets_fractions_and_notes_saying_what_is_missing() {
    let f_ = Fixture::new();
    let m = Market::new(5, "2021-01-01", "2024-06-28", 42);
    f_.small_fund(&m, &small_config(""));
    let dir = pack_dir(&f_.run(&["run", "fund.yaml", "--quiet"]));
    let r = json(&dir.join("results.json"));
    assert!(
        r["fund_value"].is_null() && r["policy"].is_null(),
        "the fixture has neither a value nor a policy"
    );
    let summary = summary_page(&pdf_text(&dir.join("pack.pdf")));
    for note in [
        "No fund value is configured (fund.value and fund.base_currency), so every figure in this pack is a fraction of the fund's value and no amount in money is shown.",
        "Policy: no policy portfolio is configured (config section `policy`)",
    ] {
        assert!(
            summary.contains(note),
            "summary note `{note}` missing: {summary}"
        );
    }
    let cvar = f(&at_level(&r["current"]["levels"], 0.95)["cvar"]);
    assert!(
        summary.contains(&format!("CVaR {} at 95%.", printed(cvar, false))),
        "the current CVaR is still printed, as a fraction only"
    );
    assert!(
        !summary.contains("n/a") && !summary.contains("fund value of"),
        "no broken money cell or money note without a value: {summary}"
    );

    // With a value but still no policy: the amounts appear and only the policy note remains.
    let g = Fixture::new();
    g.small_fund(
        &m,
        &small_config("  value: 1000000\n  base_currency: XTS\n"),
    );
    let dir = pack_dir(&g.run(&["run", "fund.yaml", "--quiet"]));
    let r = json(&dir.join("results.json"));
    let summary = summary_page(&pdf_text(&dir.join("pack.pdf")));
    let cvar = f(&at_level(&r["current"]["levels"], 0.95)["cvar"]);
    let want = format!(
        "CVaR {} (XTS {}) at 95%.",
        printed(cvar, false),
        amount(1_000_000.0 * cvar, false)
    );
    assert!(summary.contains(&want), "`{want}` missing: {summary}");
    assert!(!summary.contains("No fund value is configured"));
    assert!(summary.contains("Policy: no policy portfolio is configured"));
}

#[test]
fn the_money_rule_of_this_test_groups_and_signs_by_hand() {
    // The test's own formatter against amounts written out by hand, so the checks above can fail.
    assert_eq!(amount(123_303_654.4, false), "123,303,654");
    assert_eq!(amount(-450_730_000.0, true), "\u{2212}450,730,000");
    assert_eq!(amount(617_874.0, true), "+617,874");
    assert_eq!(amount(999.0, false), "999");
    assert_eq!(amount(-0.4, true), "0");
}
