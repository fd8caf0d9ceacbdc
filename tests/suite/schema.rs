//! JSON Schemas: the files shipped in `schemas/` are exactly what the types generate
//! (`tailpack::schema::all`), and the JSON files tailpack writes validate against them with Python's
//! `jsonschema` (tests/reference/validate_json.py), an implementation independent of the Rust side: packs
//! covering every optional part of results.json, the manifest, the sign-off record and the archive index;
//! every successful `run`, `sign` and `finalize` of the other tests ([`check_written`]); and files of the
//! wrong shape, which must be rejected.
//!
//! Without python3 and `jsonschema` the validating tests print why and pass without checking (install it
//! with `pip install -r tests/reference/requirements.txt`; `.ci/run` does).

use super::common::{Fixture, Market, Ran, config, copy_dir, json, repo};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

/// Set to rewrite `schemas/` from the types (then read the diff and commit it).
const UPDATE: &str = "TAILPACK_UPDATE_SCHEMAS";

#[test]
fn shipped_schemas_are_the_ones_the_types_generate() {
    let dir = repo().join("schemas");
    let generated = tailpack::schema::all();
    if std::env::var_os(UPDATE).is_some() {
        std::fs::create_dir_all(&dir).unwrap();
        for (name, text) in &generated {
            std::fs::write(dir.join(name), text).unwrap();
        }
    }
    let stale: Vec<&str> = generated
        .iter()
        .filter(|(name, text)| std::fs::read_to_string(dir.join(name)).ok().as_ref() != Some(text))
        .map(|(name, _)| *name)
        .collect();
    assert!(
        stale.is_empty(),
        "schemas/{stale:?} differ from what the types generate: run `{UPDATE}=1 cargo test --test suite schema::shipped` and commit schemas/"
    );
    let mut shipped: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    shipped.sort();
    let mut names: Vec<String> = generated.iter().map(|(n, _)| n.to_string()).collect();
    names.sort();
    assert_eq!(shipped, names, "schemas/ holds exactly the generated files");
}

/// Whether python3 with `jsonschema` is installed (asked once; the reason to skip printed once).
fn available() -> bool {
    static ONCE: OnceLock<bool> = OnceLock::new();
    *ONCE.get_or_init(|| {
        let ok = Command::new("python3")
            .args(["-c", "import jsonschema"])
            .output()
            .is_ok_and(|o| o.status.success());
        if !ok {
            eprintln!(
                "JSON files not validated: python3 with the jsonschema package is not installed (pip install -r tests/reference/requirements.txt)"
            );
        }
        ok
    })
}

/// Runs the independent validator over `files` (each checked against the schema its name selects):
/// its exit code (0 all valid, 1 some invalid) and output.
fn validate(files: &[PathBuf]) -> (i32, String) {
    let out = Command::new("python3")
        .arg(repo().join("tests/reference/validate_json.py"))
        .arg(repo().join("schemas"))
        .args(files)
        .output()
        .expect("python3 runs");
    let text =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    (out.status.code().unwrap_or(-1), text)
}

/// Panics with the validator's report unless every file is valid.
fn assert_valid(files: &[PathBuf]) {
    let (code, out) = validate(files);
    assert_eq!(code, 0, "JSON files that do not match their schema:\n{out}");
    let ok = out.lines().filter(|l| l.starts_with("ok ")).count();
    assert_eq!(ok, files.len(), "every file validated:\n{out}");
}

/// The hook of the suite's runner ([`super::common`]): after a successful `run`, validates the
/// results.json and manifest.json of every pack it printed and the archive's index.json; after a
/// successful `sign` or `finalize`, the pack's signoff.json and the index. Files written by other means
/// (a test's own tampering) are not touched.
pub fn check_written(dir: &Path, args: &[&str], ran: &Ran) {
    if ran.code != 0 || std::thread::panicking() || !available() {
        return;
    }
    let packs: Vec<PathBuf> = match args.first().copied() {
        Some("run") => (ran.stdout.lines())
            .map(|l| dir.join(l.strip_prefix("pack: ").unwrap_or(l).trim()))
            .filter(|p| p.join("results.json").is_file())
            .collect(),
        Some("sign" | "finalize") => args.get(1).map(|p| dir.join(p)).into_iter().collect(),
        _ => return,
    };
    let names: &[&str] = if args[0] == "run" {
        &["results.json", "manifest.json"]
    } else {
        &["signoff.json"]
    };
    let mut files: Vec<PathBuf> = Vec::new();
    for pack in &packs {
        files.extend(names.iter().map(|n| pack.join(n)).filter(|p| p.is_file()));
        let index = pack.ancestors().nth(3).map(|root| root.join("index.json"));
        files.extend(index.filter(|p| p.is_file() && !files.contains(p)));
    }
    if !files.is_empty() {
        assert_valid(&files);
    }
}

fn ok(ran: Ran) -> Ran {
    assert_eq!(ran.code, 0, "{}\n{}", ran.stdout, ran.stderr);
    ran
}

/// Every file named `name` below `dir`.
fn found(dir: &Path, name: &str, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).into_iter().flatten() {
        let p = e.unwrap().path();
        if p.is_dir() {
            found(&p, name, out);
        } else if p.file_name().is_some_and(|n| n == name) {
            out.push(p);
        }
    }
}

/// The demo fund (fund value, holdings, policy, currencies, costs, bands, frontier, backtest, stress,
/// sign-off) for two month-ends, the later pack compared with the earlier; the later one signed by every
/// role and finalised. A shorter backtest and fewer resamples keep it quick.
fn demo_archive(f: &Fixture) {
    copy_dir(&repo().join("config-demo"), &f.path("demo"));
    let cfg = std::fs::read_to_string(f.path("demo/fund.yaml")).unwrap();
    let cfg = cfg
        .replace("backtest_years: 5 ", "backtest_years: 1 ")
        .replace("analysis:\n", "analysis:\n  band_resamples: 10\n");
    f.write("demo/fund.yaml", &cfg);
    ok(f.run(&["run", "demo/fund.yaml", "--quiet", "--as-of", "2026-10-30"]));
    let ran = ok(f.run(&["run", "demo/fund.yaml", "--quiet"]));
    let pack = ran.stdout.lines().last().unwrap().trim().to_string();
    for (role, key) in [
        ("preparer", "preparer"),
        ("risk_reviewer", "risk-reviewer"),
        ("approver", "approver"),
    ] {
        let key = format!("demo/keys/{key}.key");
        let args = [
            "sign",
            &pack,
            "--role",
            role,
            "--key",
            &key,
            "--name",
            "A. Signer",
        ];
        ok(f.run(&args));
    }
    let key = "demo/keys/approver.key";
    ok(f.run(&["finalize", &pack, "--role", "approver", "--key", key]));
}

/// A small fund with liabilities (a proxy series, a duration), a fund value and holdings, no policy.
fn liability_fund(f: &Fixture) {
    let m = Market::new(4, "2022-01-03", "2024-06-28", 23);
    let mut csv = String::new();
    for (i, line) in m.wide_csv().lines().enumerate() {
        let liab = if i == 0 {
            "LIAB".to_string()
        } else {
            format!("{:.6}", 100.0 + (i % 17) as f64 * 0.1)
        };
        csv.push_str(&format!("{line},{liab}\n"));
    }
    f.write("liab/data/prices.csv", &csv);
    f.write("liab/data/assets.csv", &m.assets_csv());
    f.write("liab/data/holdings.csv", &m.holdings_csv());
    let cfg = config(
        "analysis:\n  backtest_years: 0\n  band_resamples: 0\nliabilities:\n  value: 900000\n  proxy: LIAB\n  duration: 12\n",
    )
    .replace(
        "  name: Test Fund (fictional)\n",
        "  name: Liability Fund (fictional)\n  value: 1000000\n  base_currency: CHF\n",
    )
    .replace("root: out", "root: ../out");
    f.write("liab/fund.yaml", &cfg);
    ok(f.run(&["run", "liab/fund.yaml", "--quiet"]));
}

/// A small fund with nothing optional: no fund value, no holdings, no policy, no currencies, no
/// sign-off; daily prices, so the backtest's daily VaR check runs; a few bootstrap resamples.
fn bare_fund(f: &Fixture) {
    let m = Market::new(3, "2021-01-01", "2024-06-28", 41);
    f.write("bare/data/prices.csv", &m.wide_csv());
    f.write("bare/data/assets.csv", &m.assets_csv());
    let models = "models:\n  max_return:\n    cvar_cap: { times_min: 1.5 }\n  min_cvar:\n    return_floor: { value: 0.0 }\n";
    let cfg = config(&format!(
        "{models}analysis:\n  backtest_years: 1\n  band_resamples: 5\n"
    ))
    .replace(
        "  name: Test Fund (fictional)\n",
        "  name: Bare Fund (fictional)\n",
    )
    .replace("  holdings: data/holdings.csv\n", "")
    .replace("root: out", "root: ../out");
    f.write("bare/fund.yaml", &cfg);
    ok(f.run(&["run", "bare/fund.yaml", "--quiet"]));
}

/// Whether some document of `docs` satisfies `pred`.
fn some(docs: &[Value], pred: impl Fn(&Value) -> bool) -> bool {
    docs.iter().any(pred)
}

#[test]
fn every_json_file_of_packs_with_every_optional_part_validates() {
    if !available() {
        return;
    }
    let f = Fixture::new();
    demo_archive(&f);
    liability_fund(&f);
    bare_fund(&f);
    let root = f.path("out");
    let mut files = Vec::new();
    for name in [
        "results.json",
        "manifest.json",
        "signoff.json",
        "index.json",
    ] {
        found(&root, name, &mut files);
    }
    let of = |name: &str| -> Vec<Value> {
        (files.iter())
            .filter(|p| p.file_name().is_some_and(|n| n == name))
            .map(|p| json(p))
            .collect()
    };
    let results = of("results.json");
    assert_eq!(
        results.len(),
        4,
        "two demo packs, the liability and the bare pack"
    );
    assert_eq!(of("manifest.json").len(), 4);
    assert_eq!(of("index.json").len(), 1);
    let null = |v: &Value, k: &str| v[k].is_null();
    for part in [
        "fund_value",
        "current",
        "policy",
        "bands",
        "backtest",
        "liabilities",
        "trades",
    ] {
        assert!(some(&results, |r| !null(r, part)), "a pack with `{part}`");
    }
    for part in [
        "fund_value",
        "current",
        "policy",
        "bands",
        "backtest",
        "liabilities",
        "signoff",
    ] {
        assert!(some(&results, |r| null(r, part)), "a pack without `{part}`");
    }
    assert!(
        some(&results, |r| !r["change"]["previous"].is_null()),
        "a change since a previous pack"
    );
    assert!(some(&results, |r| r["currency"]["exposure"]
        .as_object()
        .is_some_and(|m| !m.is_empty())));
    assert!(
        some(&results, |r| !r["liabilities"]["duration"].is_null()),
        "liabilities with a duration"
    );
    let daily = |r: &Value| {
        (r["backtest"]["models"].as_object())
            .is_some_and(|m| m.values().any(|t| !t["daily_var_99"].is_null()))
    };
    assert!(some(&results, daily), "a backtest with the daily VaR check");
    let signoff = of("signoff.json");
    assert!(
        some(&signoff, |s| !s["finalised"].is_null()),
        "a finalised pack"
    );
    let statuses: Vec<Value> = of("index.json")[0]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["status"].clone())
        .collect();
    assert!(
        statuses.contains(&"final".into()) && statuses.contains(&"draft".into()),
        "{statuses:?}"
    );
    assert_valid(&files);
}

/// One small pack and the path of its folder.
fn one_pack(f: &Fixture) -> PathBuf {
    let m = Market::new(3, "2022-01-03", "2024-06-28", 7);
    f.small_fund(
        &m,
        &config("analysis:\n  backtest_years: 0\n  band_resamples: 0\n"),
    );
    let ran = ok(f.run(&["run", "fund.yaml", "--quiet"]));
    PathBuf::from(ran.stdout.lines().last().unwrap().trim())
}

/// Writes `doc` changed by `edit` as `<case>-<name>` in `dir` and returns its path.
fn variant(dir: &Path, case: &str, name: &str, doc: &Value, edit: impl Fn(&mut Value)) -> PathBuf {
    let mut doc = doc.clone();
    edit(&mut doc);
    let path = dir.join(format!("{case}-{name}"));
    std::fs::write(&path, serde_json::to_string_pretty(&doc).unwrap()).unwrap();
    path
}

#[test]
fn a_json_file_of_the_wrong_shape_is_rejected() {
    if !available() {
        return;
    }
    let f = Fixture::new();
    let pack = one_pack(&f);
    let (results, manifest) = (
        json(&pack.join("results.json")),
        json(&pack.join("manifest.json")),
    );
    let bad = f.path("bad");
    std::fs::create_dir_all(&bad).unwrap();
    let model = results["models"]
        .as_object()
        .unwrap()
        .keys()
        .next()
        .unwrap()
        .clone();
    let cases = [
        (
            variant(&bad, "text", "results.json", &results, |r| {
                r["confidence"] = "0.95".into()
            }),
            "/confidence",
        ),
        (
            variant(&bad, "unknown", "results.json", &results, |r| {
                r["models"][&model]["risk"]["surprise"] = 1.into()
            }),
            "surprise",
        ),
        (
            variant(&bad, "missing", "results.json", &results, |r| {
                r.as_object_mut().unwrap().remove("checks");
            }),
            "checks",
        ),
        (
            variant(&bad, "weight", "results.json", &results, |r| {
                r["constraints"]["upper"]["AS01"] = "high".into()
            }),
            "/constraints/upper/AS01",
        ),
        (
            variant(&bad, "revision", "manifest.json", &manifest, |m| {
                m["revision"] = "1".into()
            }),
            "/revision",
        ),
    ];
    // The unchanged files pass, so each rejection below is the edit's doing.
    assert_valid(&[pack.join("results.json"), pack.join("manifest.json")]);
    for (path, place) in cases {
        let (code, out) = validate(std::slice::from_ref(&path));
        assert_eq!(code, 1, "{} must be rejected:\n{out}", path.display());
        assert!(
            out.contains("invalid") && out.contains(place),
            "{place} named:\n{out}"
        );
    }
}
