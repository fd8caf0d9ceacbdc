//! Every CSV tailpack writes, read back by an outside RFC 4180 reader — Python's `csv` module — must give
//! the exact texts that went in: asset codes and classes with commas, quotes, semicolons and non-ASCII
//! letters in `weights.csv` and `scenarios.csv`; fund folders, paths and signer names in the archive's
//! `index.csv`, where a signer name must not be able to forge a row.

use super::common::{Fixture, Market, config, json};
use std::path::{Path, PathBuf};
use std::process::Command;

/// The records of a CSV file as Python's csv module reads them (RFC 4180 dialect "excel").
fn python_rows(path: &Path) -> Vec<Vec<String>> {
    let script = "import csv, json, sys\n\
                  with open(sys.argv[1], newline='', encoding='utf-8') as f:\n    \
                      print(json.dumps(list(csv.reader(f, strict=True))))";
    let out = Command::new("python3")
        .args(["-c", script])
        .arg(path)
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "python's csv reader refused {}: {}",
        path.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// CSV text written by Python's csv module from `rows` (the inputs are quoted by an outside writer too).
fn python_csv(rows: &[Vec<String>]) -> String {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("rows.json");
    std::fs::write(&input, serde_json::to_vec(rows).unwrap()).unwrap();
    let out = Command::new("python3")
        .args([
            "-c",
            "import csv, json, sys\ncsv.writer(sys.stdout, lineterminator='\\n').writerows(json.load(open(sys.argv[1], encoding='utf-8')))",
        ])
        .arg(&input)
        .env("PYTHONIOENCODING", "utf-8")
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

fn strings(fields: &[&str]) -> Vec<String> {
    fields.iter().map(|s| s.to_string()).collect()
}

/// Asset codes as written in the input files, and the code tailpack keeps (names are trimmed at ingest).
const CODES: [(&str, &str); 7] = [
    ("AS,01", "AS,01"),
    ("AS\"02\"", "AS\"02\""),
    ("Lee, \"A\" 03", "Lee, \"A\" 03"),
    (" inner space 04", "inner space 04"),
    ("AS;05", "AS;05"),
    ("ÄS-Ω 06", "ÄS-Ω 06"),
    ("AS'07", "AS'07"),
];
const CLASSES: [&str; 3] = ["equity, listed", "bond \"core\"", "crédit;hy"];

/// A fund whose asset codes and classes need quoting, every input file written by Python's csv module.
fn quoted_fund(long: bool) -> Fixture {
    let f = Fixture::new();
    let m = Market::new(CODES.len(), "2022-01-03", "2024-06-28", 23);
    let raw: Vec<&str> = CODES.iter().map(|c| c.0).collect();
    let mut prices = Vec::new();
    if long {
        prices.push(strings(&["date", "asset", "price"]));
        for (d, row) in m.dates.iter().zip(&m.prices) {
            for (a, p) in raw.iter().zip(row) {
                prices.push(vec![d.to_string(), a.to_string(), format!("{p:.6}")]);
            }
        }
    } else {
        prices.push(
            std::iter::once("date")
                .chain(raw.iter().copied())
                .map(String::from)
                .collect(),
        );
        for (d, row) in m.dates.iter().zip(&m.prices) {
            let cells = row.iter().map(|p| format!("{p:.6}"));
            prices.push(std::iter::once(d.to_string()).chain(cells).collect());
        }
    }
    f.write("data/prices.csv", &python_csv(&prices));
    let mut assets = vec![strings(&["asset", "class", "max_weight"])];
    let mut holdings = vec![strings(&["asset", "weight"])];
    for (i, a) in raw.iter().enumerate() {
        assets.push(strings(&[a, CLASSES[i % 3], "0.4"]));
        holdings.push(strings(&[a, if i == 0 { "0.4" } else { "0.1" }]));
    }
    f.write("data/assets.csv", &python_csv(&assets));
    f.write("data/holdings.csv", &python_csv(&holdings));
    f.write("fund.yaml", &config("analysis:\n  backtest_years: 0\n"));
    f
}

fn run_pack(f: &Fixture) -> PathBuf {
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    PathBuf::from(ran.stdout.lines().last().unwrap())
}

fn check_pack_csvs(pack: &Path) {
    let kept: Vec<&str> = CODES.iter().map(|c| c.1).collect();
    let results = json(&pack.join("results.json"));
    assert_eq!(
        results["assets"],
        serde_json::json!(kept),
        "results.json assets"
    );
    let weights = python_rows(&pack.join("weights.csv"));
    assert_eq!(
        weights[0],
        [
            "asset",
            "class",
            "current",
            "max_return",
            "min_cvar",
            "max_ratio"
        ]
    );
    assert_eq!(
        weights.len(),
        1 + CODES.len(),
        "one record per asset: {weights:?}"
    );
    for (i, row) in weights[1..].iter().enumerate() {
        assert_eq!(row.len(), 6, "{row:?}");
        assert_eq!(row[0], kept[i]);
        // Classes are kept in lower case (metadata reader), otherwise exact.
        assert_eq!(row[1], CLASSES[i % 3].to_lowercase());
        // Holdings are rescaled to sum exactly 1 (README, "Input files"): equal up to rounding.
        let current: f64 = row[2].parse().unwrap();
        assert!((current - if i == 0 { 0.4 } else { 0.1 }).abs() < 1e-12);
    }
    let scenarios = python_rows(&pack.join("scenarios.csv"));
    let header: Vec<&str> = std::iter::once("scenario")
        .chain(kept.iter().copied())
        .collect();
    assert_eq!(scenarios[0], header);
    let count = results["scenarios"]["count"].as_u64().unwrap() as usize;
    assert_eq!(scenarios.len(), 1 + count);
    assert!(scenarios[1..].iter().all(|r| r.len() == header.len()));
}

#[test]
fn asset_codes_and_classes_read_back_exact_from_weights_and_scenarios() {
    let f = quoted_fund(false);
    check_pack_csvs(&run_pack(&f));
}

#[test]
fn asset_codes_in_the_long_layout_read_back_exact() {
    let f = quoted_fund(true);
    check_pack_csvs(&run_pack(&f));
}

/// `index.csv` against `index.json` (the same rows as JSON): equal field by field, one record per pack.
fn index_matches_json(root: &Path) -> Vec<Vec<String>> {
    let rows = python_rows(&root.join("index.csv"));
    let listed = json(&root.join("index.json"));
    let listed = listed.as_array().unwrap();
    assert_eq!(
        rows.len(),
        1 + listed.len(),
        "one record per pack: {rows:?}"
    );
    for (row, pack) in rows[1..].iter().zip(listed) {
        assert_eq!(row.len(), 9, "{row:?}");
        assert_eq!(row[0], pack["fund"].as_str().unwrap());
        assert_eq!(row[8], pack["path"].as_str().unwrap());
        assert_eq!(row[1], pack["as_of"].as_str().unwrap());
        assert_eq!(row[3], pack["pack_id"].as_str().unwrap());
        assert_eq!(row[4], pack["status"].as_str().unwrap());
        // The signers field: one `role:name` per line.
        let signers: Vec<&str> = pack["signers"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s.as_str().unwrap())
            .collect();
        assert_eq!(row[5], signers.join("\n"));
    }
    rows
}

#[test]
fn a_fund_folder_with_a_comma_and_quote_is_quoted_in_the_index() {
    let f = Fixture::new();
    let m = Market::new(3, "2021-01-01", "2024-06-28", 5);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 0\n"));
    let pack = run_pack(&f);
    // A copy of the pack under a fund folder whose name needs quoting; the next run rebuilds the index.
    let odd = f.path("out/odd, \"name\"\nfund/2024-06-28/r1");
    super::common::copy_dir(&pack, &odd);
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.5\nAS02,0.3\nAS03,0.2\n",
    );
    run_pack(&f);
    let rows = index_matches_json(&f.path("out"));
    let row = rows
        .iter()
        .find(|r| r[0] == "odd, \"name\"\nfund")
        .unwrap_or_else(|| panic!("the copied pack's row: {rows:?}"));
    assert_eq!(row[8], "odd, \"name\"\nfund/2024-06-28/r1");
}

#[test]
fn signer_names_with_commas_quotes_and_line_breaks_cannot_forge_a_row() {
    let f = Fixture::new();
    let m = Market::new(3, "2021-01-01", "2024-06-28", 9);
    std::fs::create_dir_all(f.path("keys")).unwrap();
    let mut keys = vec![];
    for role in ["preparer", "reviewer", "approver"] {
        let ran = f.run(&["keygen", &format!("keys/{role}")]);
        assert_eq!(ran.code, 0, "{}", ran.stderr);
        keys.push(
            std::fs::read_to_string(f.path(&format!("keys/{role}.pub")))
                .unwrap()
                .trim()
                .to_string(),
        );
    }
    let tail = format!(
        "analysis:\n  backtest_years: 0\nsignoff:\n  roles:\n    - {{ role: preparer, keys: [\"{}\"] }}\n    - {{ role: reviewer, keys: [\"{}\"] }}\n    - {{ role: approver, keys: [\"{}\"] }}\n",
        keys[0], keys[1], keys[2]
    );
    f.small_fund(&m, &config(&tail));
    let pack = run_pack(&f);
    let sign = |role: &str, name: &str| {
        f.run(&[
            "sign",
            pack.to_str().unwrap(),
            "--role",
            role,
            "--key",
            &format!("keys/{role}.key"),
            "--name",
            name,
        ])
    };
    let chair = "Lee, Ann \"Chair\"";
    let ran = sign("preparer", chair);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let ran = sign("reviewer", "Ng; Bo: risk, \"deputy\"");
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let rows = index_matches_json(&f.path("out"));
    assert_eq!(rows.len(), 2);
    assert_eq!(
        rows[1][5],
        format!("preparer:{chair}\nreviewer:Ng; Bo: risk, \"deputy\"")
    );
    assert_eq!(rows[1][4], "signing");
    // A name that tries to end the record and start a forged one. `sign` refuses control characters
    // (exit 8); if it ever signs such a name, the index must still hold one record for the pack.
    let forged = "X\"\nfake-fund,2024-06-28,9,00,final,,,,fake/path\n\"";
    let ran = sign("approver", forged);
    let rows = index_matches_json(&f.path("out"));
    assert_eq!(rows.len(), 2, "{rows:?}");
    if ran.code == 0 {
        assert!(rows[1][5].ends_with(&format!("approver:{forged}")));
    } else {
        assert_eq!(ran.code, 8, "{}", ran.stderr);
    }
    assert!(rows.iter().all(|r| r[0] != "fake-fund"));
}
