//! The committee PDF, read back by poppler (pdftotext, pdfinfo), tools outside the project: its sections,
//! its figures as printed, determinism, a large universe, and custom templates.

use super::common::{config, json, pdf_pages, pdf_text, repo, Fixture, Market};
use std::path::PathBuf;

fn pack_dir(ran: &super::common::Ran) -> PathBuf {
    assert_eq!(ran.code, 0, "stderr: {}", ran.stderr);
    PathBuf::from(ran.stdout.lines().last().expect("stdout has lines"))
}

/// The demo fund's pack, written below `out`.
fn demo_pack(f: &Fixture, out: &str) -> PathBuf {
    let cfg = repo().join("config-demo/fund.yaml");
    pack_dir(&f.run(&["run", cfg.to_str().unwrap(), "--out", out, "--quiet"]))
}

/// The README's rule for printed percentages ("The PDF pack"), written out here independently of the
/// library: two decimals; returns signed; losses unsigned; U+2212 as minus; a value rounding to zero unsigned.
fn printed(x: f64, signed: bool) -> String {
    let v = x * 100.0;
    let digits = format!("{:.2}", v.abs());
    if digits == "0.00" {
        return "0.00%".into();
    }
    let sign = if v < 0.0 { "\u{2212}" } else if signed { "+" } else { "" };
    format!("{sign}{digits}%")
}

/// Whitespace runs collapsed, so words that the layout spread apart still match.
fn squeeze(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[test]
fn pdf_has_every_section_and_the_figures_of_results_json() {
    let f = Fixture::new();
    let dir = demo_pack(&f, "out");
    let pdf = dir.join("pack.pdf");
    let text = pdf_text(&pdf);
    let flat = squeeze(&text);
    // Section titles: the list of sections the pack promises (README, "The PDF pack").
    for title in ["Contents", "Summary", "Allocations", "Tail loss", "Further analysis", "Checks", "Caveats", "Method",
                  "Data and provenance", "Sign-off", "Important cautions"] {
        assert!(text.contains(title), "section title `{title}` missing from the PDF text");
    }
    // Figures: results.json, formatted by the README rule above, must appear as pdftotext reads them.
    let r = json(&dir.join("results.json"));
    for name in ["max_return", "min_cvar", "max_ratio"] {
        let m = &r["models"][name];
        for (what, x, signed) in [("CVaR", &m["cvar"], false), ("VaR", &m["var"], false), ("expected return", &m["expected_return"], true)] {
            let want = printed(x.as_f64().unwrap(), signed);
            assert!(text.contains(&want), "{name} {what} printed as {want} is missing from the PDF");
        }
    }
    let current = &r["current"];
    assert!(text.contains(&printed(current["levels"][0]["cvar"].as_f64().unwrap(), false)), "current CVaR missing");
    assert!(text.contains(&printed(current["expected_return"].as_f64().unwrap(), true)), "current expected return missing");
    // Identity and status: the pack id of results.json in full (cover) and shortened (every footer).
    let id = r["pack_id"].as_str().unwrap();
    assert!(text.contains(id), "full pack id missing");
    let pages = pdf_pages(&pdf);
    assert!(text.matches(&id[..12]).count() >= pages, "the short pack id must be on every page");
    assert!(flat.contains(&format!("Page {pages} of {pages}")), "footer `Page x of y` missing for the last page");
    assert!(text.matches("DRAFT").count() >= pages, "the DRAFT status must be on every page");
    // The cautions the pack must carry (README, "Decision support, not advice").
    for phrase in ["not investment advice", "investment policy", "licensed professionals"] {
        assert!(flat.contains(phrase), "caution `{phrase}` missing");
    }
    // Every input digest of results.json is printed in the data appendix.
    for input in r["inputs"].as_array().unwrap() {
        assert!(text.contains(input["sha256"].as_str().unwrap()), "digest of {} missing", input["role"]);
    }
}

#[test]
fn two_runs_give_byte_identical_pdfs() {
    let f = Fixture::new();
    let a = demo_pack(&f, "first");
    let b = demo_pack(&f, "second");
    let (x, y) = (std::fs::read(a.join("pack.pdf")).unwrap(), std::fs::read(b.join("pack.pdf")).unwrap());
    assert!(x.len() > 10_000, "a real PDF was written");
    assert!(x == y, "pack.pdf differs between two runs on the same inputs");
}

#[test]
fn pdf_claims_pdf_a_2b_and_is_dated_by_the_as_of_date() {
    let f = Fixture::new();
    let pdf = demo_pack(&f, "out").join("pack.pdf");
    let bytes = std::fs::read(&pdf).unwrap();
    // PDF/A identification schema (ISO 19005-2, 6.6.4): part 2, conformance B, in the XMP metadata.
    let xmp = String::from_utf8_lossy(&bytes);
    assert!(xmp.contains("<pdfaid:part>2</pdfaid:part>") || xmp.contains("pdfaid:part=\"2\""), "no PDF/A part 2 claim");
    assert!(xmp.contains("<pdfaid:conformance>B</pdfaid:conformance>") || xmp.contains("pdfaid:conformance=\"B\""), "no conformance B claim");
    // pdfinfo reads the creation date: the demo's as-of date (config-demo data ends 2026-11-30), not the clock.
    let out = std::process::Command::new("pdfinfo").arg(&pdf).output().unwrap();
    let info = String::from_utf8_lossy(&out.stdout);
    let created = info.lines().find(|l| l.starts_with("CreationDate:")).expect("a creation date");
    assert!(created.contains("Nov 30") && created.contains("2026"), "{created}");
}

#[test]
fn a_200_asset_universe_renders_with_paginated_weights() {
    let f = Fixture::new();
    let m = Market::broad(200, "2021-01-01", "2024-06-28", 7);
    f.small_fund(&m, &config(""));
    let dir = pack_dir(&f.run(&["run", "fund.yaml", "--quiet"]));
    let pdf = dir.join("pack.pdf");
    let pages = pdf_pages(&pdf);
    // Bound: 15 pages of fixed sections plus the weights table at no fewer than 40 rows a page (200 rows →
    // at most 5 pages) plus slack for the checks table: at most 25 pages.
    assert!((16..=25).contains(&pages), "200 assets gave {pages} pages");
    let text = pdf_text(&pdf);
    for a in &m.assets {
        assert!(text.contains(a.as_str()), "asset {a} missing from the weights table");
    }
    // The weights table's header repeats on every page it spans (here at least four).
    let headed = text.split('\u{c}').filter(|page| page.contains("Bounds") && page.contains("Name")).count();
    assert!(headed >= 4, "weights table header found on {headed} page(s)");
}

fn broken_template_fixture(template: &str) -> Fixture {
    let f = Fixture::new();
    let m = Market::new(5, "2021-01-01", "2024-06-28", 42);
    f.small_fund(&m, &config("report:\n  templates: tpl\n"));
    f.write("tpl/summary.typ", template);
    f
}

#[test]
fn a_broken_custom_template_exits_2_naming_file_and_line_and_leaves_no_pack() {
    // Line 3 calls a function that does not exist: typst reports "unknown variable".
    let f = broken_template_fixture("// a custom summary\n= Summary\n#no-such-function(1)\n");
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 2, "stderr: {}", ran.stderr);
    // The config names the folder relative to itself (`tpl`), run from the fixture folder.
    assert!(ran.stderr.contains("template tpl/summary.typ"), "error must name the template file: {}", ran.stderr);
    assert!(ran.stderr.contains("line 3"), "error must name the line: {}", ran.stderr);
    assert!(ran.stderr.contains("no-such-function"), "error must carry typst's message: {}", ran.stderr);
    assert!(f.entries("out/test-fund-fictional").is_empty(), "no pack (nor partial folder) may be left: {:?}", f.entries("out/test-fund-fictional"));
}

#[test]
fn a_custom_template_replaces_only_its_own_section() {
    let f = broken_template_fixture("#import \"style.typ\": *\n= Summary\nCustom summary text for the committee.\n");
    let pdf = pack_dir(&f.run(&["run", "fund.yaml", "--quiet"])).join("pack.pdf");
    let text = squeeze(&pdf_text(&pdf));
    assert!(text.contains("Custom summary text for the committee."), "the custom summary must be used");
    assert!(text.contains("Important cautions") && text.contains("Tail loss"), "the other sections stay the built-in ones");
}

#[test]
fn report_templates_must_be_a_folder_and_keys_are_checked() {
    let f = Fixture::new();
    let m = Market::new(5, "2021-01-01", "2024-06-28", 42);
    f.small_fund(&m, &config("report:\n  templates: missing-folder\n"));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 2);
    assert!(ran.stderr.contains("report.templates") && ran.stderr.contains("missing-folder"), "{}", ran.stderr);
    f.write("fund.yaml", &config("report:\n  templats: tpl\n"));
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 2);
    assert!(ran.stderr.contains("did you mean `templates`?"), "{}", ran.stderr);
}

#[test]
fn a_fund_without_holdings_and_an_infeasible_model_still_gets_a_full_pack() {
    let f = Fixture::new();
    let m = Market::new(5, "2021-01-01", "2024-06-28", 42);
    f.write("data/prices.csv", &m.wide_csv());
    f.write("data/assets.csv", &m.assets_csv());
    // A 50% expected return over 5 observations is out of reach for this market: min_cvar is infeasible.
    f.write("fund.yaml", "fund:\n  name: Test Fund (fictional)\ndata:\n  prices: data/prices.csv\n  assets: data/assets.csv\nscenarios:\n  horizon: 5\n  lookback_years: 2\nmodels:\n  min_cvar:\n    return_floor: { value: 0.5 }\noutput:\n  root: out\n");
    let dir = pack_dir(&f.run(&["run", "fund.yaml", "--quiet"]));
    let r = json(&dir.join("results.json"));
    assert_eq!(r["models"]["min_cvar"]["status"], "infeasible", "the fixture must make min_cvar infeasible");
    let text = squeeze(&pdf_text(&dir.join("pack.pdf")));
    assert!(text.contains("Min CVaR: infeasible"), "the summary must say the model is infeasible");
    assert!(!text.contains("Current"), "without holdings there is no current portfolio to show");
    let cvar = printed(r["models"]["max_return"]["cvar"].as_f64().unwrap(), false);
    assert!(text.contains(&cvar), "the solved model's CVaR {cvar} must still be printed");
}
