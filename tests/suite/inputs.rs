//! Config, stress and input files at their limits, through the real binary: text bounds (a 50 MB value
//! is refused in seconds), paths that are not files, output roots inside a pack, and `check` refusing
//! what `run` refuses before its first LP. Single cases of each kind are also in the bad-input corpus. And
//! every kind of input the registry (`config::Input`) lists: archived, hashed and read back on a re-run.

use super::common::{Fixture, Market, Ran, config};
use std::time::{Duration, Instant};

/// A run refused for its inputs must be over within this (debug build, on a shared 2-core machine).
const FAST: Duration = Duration::from_secs(10);
/// Longest any run here may take before it counts as hanging.
const HANG: Duration = Duration::from_secs(120);
/// The file-size bound of config and stress files (README, "Config reference"), restated here.
const FILE_BOUND: usize = 2 * 1024 * 1024;

fn fund() -> Fixture {
    let f = Fixture::new();
    let m = Market::new(4, "2022-01-03", "2024-06-28", 11);
    f.small_fund(&m, &config(""));
    f
}

/// Runs `args` and returns what it printed and how long it took.
fn timed(f: &Fixture, args: &[&str]) -> (Ran, Duration) {
    let start = Instant::now();
    let ran = f.run_within(args, HANG);
    (ran, start.elapsed())
}

/// Both `check` and `run` refuse the fund with `code`, quickly, each message containing every needle
/// and staying short; `run` leaves no pack.
fn both_refuse(f: &Fixture, config: &str, code: i32, needles: &[&str]) {
    for cmd in ["check", "run"] {
        let args: Vec<&str> = match cmd {
            "run" => vec!["run", config, "--quiet"],
            _ => vec!["check", config],
        };
        let (ran, took) = timed(f, &args);
        let shown = format!(
            "{cmd} {config}: exit {}, {took:?}\n{}",
            ran.code, ran.stderr
        );
        assert_eq!(ran.code, code, "{shown}");
        assert!(took < FAST, "too slow: {shown}");
        assert!(
            ran.stderr.len() < 1500,
            "message too long: {}",
            &shown[..1500]
        );
        for n in needles {
            assert!(ran.stderr.contains(n), "missing `{n}`: {shown}");
        }
    }
    assert!(f.entries("out").is_empty(), "no pack after an error");
}

/// The 1-based line of the first line of `text` that contains `needle`.
fn line_of(text: &str, needle: &str) -> usize {
    text.lines()
        .position(|l| l.contains(needle))
        .expect("needle in text")
        + 1
}

/// Configs (and stress files) holding one huge text in different places: (what, config, stress file).
fn huge_texts(value: &str) -> Vec<(&'static str, String, Option<String>)> {
    let base = config("");
    let key = "2c34a33c5d72f1f9e9b7fc7c896a0e87642ca783cdefa30d7ca5b5c5a994034c";
    let many_lines: String = value
        .as_bytes()
        .chunks(50)
        .map(|c| format!("    {}\n", std::str::from_utf8(c).unwrap()))
        .collect();
    let multi = base.replace("fund:\n  name: Test Fund (fictional)\n", "")
        + &format!(
            "funds:\n  - fund: {{ name: Fund A (fictional) }}\n  - fund:\n      name: Fund B (fictional)\n      prepared_for: {value}\n"
        );
    vec![
        (
            "fund.name",
            base.replace("Test Fund (fictional)", value),
            None,
        ),
        (
            "signoff.roles[0].title",
            base.clone()
                + &format!(
                    "signoff:\n  roles:\n    - role: approver\n      title: {value}\n      keys: [\"{key}\"]\n"
                ),
            None,
        ),
        ("funds[1].fund.prepared_for", multi, None),
        (
            "fund.prepared_by",
            base.replace(
                "  name: Test Fund (fictional)\n",
                &format!("  name: Test Fund (fictional)\n  prepared_by: |\n{many_lines}"),
            ),
            None,
        ),
        (
            "shocks[0].description",
            base.clone() + "stress:\n  file: stress.yaml\n",
            Some(format!(
                "shocks:\n  - name: Fall\n    description: {value}\n    moves: [{{ tag: \"class:equity\", return: -0.2 }}]\n"
            )),
        ),
    ]
}

#[test]
fn fifty_megabyte_texts_are_refused_by_file_size_in_seconds() {
    let f = fund();
    let value = "v".repeat(50 << 20);
    for (what, cfg, stress) in huge_texts(&value) {
        f.write("fund.yaml", &cfg);
        let file = match stress {
            Some(s) => {
                f.write("stress.yaml", &s);
                "stress.yaml"
            }
            None => "fund.yaml",
        };
        let bytes = format!("larger than {FILE_BOUND} bytes");
        both_refuse(&f, "fund.yaml", 2, &[file, &bytes]);
        let _ = what;
    }
}

#[test]
fn texts_under_the_file_size_but_over_their_bound_name_key_and_line() {
    let f = fund();
    // 1.5 MB: under the file bound, so the parser sees it and the text bound refuses it.
    let value = "w".repeat(1_500_000);
    for (key, cfg, stress) in huge_texts(&value) {
        f.write("fund.yaml", &cfg);
        let (file, text) = match &stress {
            Some(s) => {
                f.write("stress.yaml", s);
                ("stress.yaml", s.as_str())
            }
            None => ("fund.yaml", cfg.as_str()),
        };
        let last_key = key.rsplit('.').next().unwrap();
        let line = format!("at line {} column", line_of(text, &format!("{last_key}:")));
        let (max, chars) = if key.ends_with("description") {
            (4000, value.len())
        } else if key == "fund.prepared_by" {
            // Each 50-character line of the block keeps its line end.
            (200, value.len() + value.len() / 50)
        } else {
            (200, value.len())
        };
        let says = format!("{key}: a text of {chars} characters");
        let most = format!("at most {max} characters");
        both_refuse(&f, "fund.yaml", 2, &[file, &says, &most, &line]);
    }
}

#[test]
fn texts_at_their_bound_pass_and_reach_the_pdf() {
    let f = fund();
    // The longest texts allowed: a 200-character fund name and a 4000-character shock description.
    let name = format!("Bound Test Fund (fictional) {}", "n".repeat(200 - 28));
    assert_eq!(name.chars().count(), 200);
    let description = "A long invented scenario note. ".repeat(130)[..4000].to_string();
    f.write(
        "fund.yaml",
        &(config("").replace("Test Fund (fictional)", &name)
            + "stress:\n  file: stress.yaml\nanalysis:\n  backtest_years: 0\n"),
    );
    f.write(
        "stress.yaml",
        &format!(
            "shocks:\n  - name: Fall\n    description: {description}\n    moves: [{{ tag: \"class:equity\", return: -0.2 }}]\n"
        ),
    );
    let ran = f.run_within(&["run", "fund.yaml", "--quiet"], HANG);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = std::path::PathBuf::from(ran.stdout.lines().last().unwrap());
    let text = super::common::pdf_text(&pack.join("pack.pdf"));
    assert!(text.contains("Bound Test Fund"), "the fund name is printed");
}

#[test]
fn long_metadata_cells_are_data_errors_naming_row_and_column() {
    let f = fund();
    let long = "m".repeat(5 << 20);
    let cases = [
        (
            format!(
                "asset,class,name\nAS01,equity,x\nAS02,bond,{long}\nAS03,equity,x\nAS04,bond,x\n"
            ),
            "row 2 (line 3), column `name`",
        ),
        (
            format!("asset,class\nAS01,equity\nAS02,bond\nAS03,{long}\nAS04,bond\n"),
            "row 3 (line 4), column `class`",
        ),
        (
            format!(
                "asset,class,region\nAS01,equity,north\nAS02,bond,north\nAS03,equity,north\nAS04,bond,{}\n",
                &long[..201]
            ),
            "row 4 (line 5), column `region`",
        ),
        (
            format!(
                "asset,class\nAS01,equity\nAS02,bond\nAS03,equity\nAS04,bond\n{},bond\n",
                &long[..300]
            ),
            "row 5 (line 6), column `asset`",
        ),
    ];
    for (csv, place) in cases {
        f.write("data/assets.csv", &csv);
        both_refuse(
            &f,
            "fund.yaml",
            3,
            &["assets.csv", place, "at most 200 characters"],
        );
    }
    for (csv, place) in [
        (
            "asset,class\nAS01,equity\nAS02,\nAS03,equity\nAS04,bond\n",
            "row 2 (line 3)",
        ),
        (
            "asset,class\nAS01,equity\nAS02,bond\nAS03,equity\nAS04,\t \n",
            "row 4 (line 5)",
        ),
    ] {
        f.write("data/assets.csv", csv);
        both_refuse(
            &f,
            "fund.yaml",
            3,
            &["assets.csv", place, "column `class`", "blank asset class"],
        );
    }
}

/// Makes `name` in the fixture into `kind` of non-file; returns what the message must call it.
fn make(f: &Fixture, name: &str, kind: &str) -> String {
    let p = f.path(name);
    let _ = std::fs::remove_file(&p);
    let _ = std::fs::remove_dir_all(&p);
    match kind {
        "folder" => {
            std::fs::create_dir_all(p.join("inside")).unwrap();
            format!("{name} is a folder, not a file")
        }
        "fifo" => {
            let made = std::process::Command::new("mkfifo")
                .arg(&p)
                .status()
                .unwrap();
            assert!(made.success());
            format!("{name} is a named pipe (FIFO), not a file")
        }
        "socket" => {
            std::os::unix::net::UnixListener::bind(&p).unwrap();
            format!("{name} is a socket, not a file")
        }
        "broken symlink" => {
            std::os::unix::fs::symlink(f.path("gone.csv"), &p).unwrap();
            format!("{name} is a symbolic link to something that does not exist")
        }
        "missing" => format!("{name} does not exist"),
        dev => {
            std::os::unix::fs::symlink(dev, &p).unwrap();
            format!("{name} is a device, not a file")
        }
    }
}

const NOT_FILES: [&str; 7] = [
    "folder",
    "fifo",
    "socket",
    "broken symlink",
    "missing",
    "/dev/null",
    "/dev/zero",
];

#[test]
fn input_paths_that_are_not_files_say_what_they_are() {
    let f = fund();
    let keys = [
        ("data.prices", "prices: data/prices.csv", "prices: odd.csv"),
        ("data.assets", "assets: data/assets.csv", "assets: odd.csv"),
        (
            "data.holdings",
            "holdings: data/holdings.csv",
            "holdings: odd.csv",
        ),
    ];
    for kind in NOT_FILES {
        for (key, from, to) in keys {
            f.write("fund.yaml", &config("").replace(from, to));
            let what = make(&f, "odd.csv", kind);
            both_refuse(&f, "fund.yaml", 2, &[key, &what]);
        }
        f.write("fund.yaml", &(config("") + "stress:\n  file: odd.yaml\n"));
        let what = make(&f, "odd.yaml", kind);
        both_refuse(&f, "fund.yaml", 2, &["stress.file", &what]);
    }
}

#[test]
fn a_config_argument_that_is_not_a_file_says_what_it_is() {
    let f = fund();
    for kind in NOT_FILES {
        let what = make(&f, "odd.yaml", kind);
        let what = what.trim_start_matches("odd.yaml ");
        both_refuse(&f, "odd.yaml", 2, &["config odd.yaml", what]);
    }
}

/// Every file below `dir` with its bytes, hidden ones included.
fn snapshot(dir: &std::path::Path) -> Vec<(std::path::PathBuf, Vec<u8>)> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(snapshot(&p));
        } else {
            out.push((p.clone(), std::fs::read(&p).unwrap()));
        }
    }
    out.sort();
    out
}

#[test]
fn an_output_root_in_a_pack_is_refused_and_the_pack_still_verifies() {
    let f = fund();
    let ran = f.run_within(&["run", "fund.yaml", "--quiet"], HANG);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = std::path::PathBuf::from(ran.stdout.lines().last().unwrap());
    let pack = std::fs::canonicalize(f.path("").join(&pack)).unwrap();
    let before = snapshot(&pack);
    std::os::unix::fs::symlink(pack.join("inputs"), f.path("link-into-pack")).unwrap();
    let shown = pack.display().to_string();
    let outs = [
        pack.clone(),
        pack.join("inputs"),
        pack.join("sub/new folder"),
        f.path("link-into-pack"),
        f.path("link-into-pack/deeper"),
    ];
    for out in &outs {
        let out = out.to_str().unwrap();
        let ran = f.run_within(&["run", "fund.yaml", "--quiet", "--out", out], HANG);
        assert_eq!(ran.code, 2, "--out {out}: {}", ran.stderr);
        for n in ["--out", out, "is inside the pack", &shown] {
            assert!(
                ran.stderr.contains(n),
                "--out {out}: `{n}` missing: {}",
                ran.stderr
            );
        }
    }
    // The same through output.root (relative to the config file), for one fund and for several.
    let rel = pack
        .strip_prefix(std::fs::canonicalize(f.path("")).unwrap())
        .unwrap();
    let root = format!("  root: {}/inputs\n", rel.display());
    let one = config("").replace("  root: out\n", &root);
    let several = one.replace("fund:\n  name: Test Fund (fictional)\n", "")
        + "funds:\n  - fund: { name: Fund A (fictional) }\n  - fund: { name: Fund B (fictional) }\n";
    for cfg in [one, several] {
        f.write("fund.yaml", &cfg);
        for args in [
            vec!["run", "fund.yaml", "--quiet"],
            vec!["check", "fund.yaml"],
        ] {
            let ran = f.run_within(&args, HANG);
            assert_eq!(ran.code, 2, "{args:?}: {}", ran.stderr);
            for n in ["output.root", "is inside the pack", &shown] {
                assert!(
                    ran.stderr.contains(n),
                    "{args:?}: `{n}` missing: {}",
                    ran.stderr
                );
            }
        }
    }
    assert_eq!(
        snapshot(&pack),
        before,
        "nothing in the pack changed, nothing was added"
    );
    assert!(!pack.join("sub").exists());
    let ran = f.run_within(&["verify", pack.to_str().unwrap()], HANG);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    // The archive root itself is no pack: running into it again finds the identical pack (exit 5).
    f.write("fund.yaml", &config(""));
    let ran = f.run_within(&["run", "fund.yaml", "--quiet", "--out", "out"], HANG);
    assert_eq!(ran.code, 5, "{}", ran.stderr);
}

/// The seconds `run --timings` printed for `stage`.
fn stage_seconds(stderr: &str, stage: &str) -> f64 {
    let line = stderr
        .lines()
        .find(|l| l.trim_start().starts_with(stage))
        .unwrap_or_else(|| panic!("no `{stage}` line in {stderr}"));
    line.split_whitespace().nth(1).unwrap().parse().unwrap()
}

#[test]
fn check_refuses_what_run_refuses_and_run_refuses_it_before_any_lp() {
    let f = fund();
    let shocks = "shocks:\n  - name: Fall\n    moves: [{ tag: \"class:equity\", return: -0.2 }]\n";
    let cases: [(&str, &str, &[&str]); 7] = [
        (
            "shocks:\n  - name: Fall\n    moves: [{ tag: x\n  - name: B\n",
            "",
            &["stress.yaml", "line 4"],
        ),
        (
            "shocks:\n  - name: Fall\n    moves: [{ asset: AS09, return: -0.2 }]\n",
            "",
            &["stress.yaml", "shock `Fall`", "unknown asset `AS09`"],
        ),
        (
            "shocks:\n  - name: Fall\n    moves: [{ tag: \"region:north\", return: -0.2 }]\n",
            "",
            &["stress.yaml", "tag `region:north` matches no asset"],
        ),
        (
            "shocks:\n  - name: Fall\n    moves: []\n  - name: Rise\n    moves: []\n  - name: Fall\n    moves: []\n",
            "",
            &[
                "stress.yaml",
                "shocks[2].name (line 6)",
                "already the name of shocks[0]",
            ],
        ),
        (
            shocks,
            "limits:\n  groups:\n    - { name: Core, assets: [AS01, AS9] }\n",
            &["fund.yaml", "limits.groups `Core`", "unknown asset `AS9`"],
        ),
        (
            shocks,
            "limits:\n  groups:\n    - { name: Core, tag: \"sector:tech\" }\n",
            &["fund.yaml", "limits.groups `Core`", "no column `sector`"],
        ),
        (
            shocks,
            "limits:\n  groups:\n    - { name: Core, tag: \"class:cash\" }\n",
            &["fund.yaml", "limits.groups `Core`", "selects no asset"],
        ),
    ];
    for (stress, limits, needles) in cases {
        f.write("stress.yaml", stress);
        f.write(
            "fund.yaml",
            &(config("") + "stress:\n  file: stress.yaml\n" + limits),
        );
        both_refuse(&f, "fund.yaml", 2, needles);
        let check = f.run_within(&["check", "fund.yaml"], HANG);
        let run = f.run_within(&["run", "fund.yaml", "--quiet", "--timings"], HANG);
        let first = |r: &Ran| {
            let error = r.stderr.lines().find(|l| l.starts_with("error:"));
            error.unwrap_or("").to_string()
        };
        assert_eq!(first(&check), first(&run), "the same message");
        assert_eq!(
            stage_seconds(&run.stderr, "models"),
            0.0,
            "no LP ran: {}",
            run.stderr
        );
    }
}

// Every input the registry lists is archived, hashed and re-read.

use tailpack::config::Input;

/// Where the fixture of [`every_input`] keeps each kind of input (for the template folder, the one file
/// it holds; none for the run record), and how to change its bytes but not what it means — an exhaustive
/// match, so a new kind of input does not compile here until this test knows how to give it.
fn source_of(kind: Input) -> Option<&'static str> {
    match kind {
        Input::Config => Some("fund.yaml"),
        Input::Prices => Some("data/prices.csv"),
        Input::Assets => Some("data/assets.csv"),
        Input::Holdings => Some("data/holdings.csv"),
        Input::Fx => Some("data/rates.csv"),
        Input::Stress => Some("shocks/set.yaml"),
        Input::Templates => Some("tpl/summary.typ"),
        Input::Scenarios => Some("data/simulated.csv"),
        Input::Run => None,
    }
}

/// The same input in other bytes: a comment in YAML and typst, a quoted header cell in CSV; the run
/// record asks for the other backend (its bytes are written by the run, so only a change it reads back
/// shows that it was read).
fn other_bytes(kind: Input, bytes: &[u8]) -> Vec<u8> {
    let text = String::from_utf8(bytes.to_vec()).expect("text input");
    let quoted = |t: &str| {
        t.replacen("asset", "\"asset\"", 1)
            .replacen("date", "\"date\"", 1)
    };
    match kind {
        Input::Config | Input::Stress => text + "# the same, in other bytes\n",
        Input::Templates => text + "// the same, in other bytes\n",
        Input::Prices | Input::Assets | Input::Holdings | Input::Fx => quoted(&text),
        Input::Scenarios => text.replacen("scenario", "\"scenario\"", 1),
        Input::Run => text.replace("\"highs\"", "\"clarabel\""),
    }
    .into_bytes()
}

/// A small fund that names every input the registry lists, none at a path that is also its archived name
/// (so a re-run that is not pointed at an archived copy finds nothing).
fn every_input() -> super::common::Fixture {
    let f = Fixture::new();
    let m = Market::new(3, "2023-01-02", "2024-06-28", 31);
    f.small_fund(
        &m,
        &config(
            "analysis:\n  backtest_years: 0\n  daily_var_check: false\n  frontier_points: 3\nstress:\n  file: shocks/set.yaml\nreport:\n  templates: tpl\n",
        )
        .replace("  name: Test Fund (fictional)\n", "  name: Test Fund (fictional)\n  base_currency: XTS\n")
        .replace("  holdings: data/holdings.csv\n", "  holdings: data/holdings.csv\n  fx: data/rates.csv\n  scenarios: data/simulated.csv\n"),
    );
    // 120 invented joint scenarios of the three assets (the models' scenarios come from them).
    let rows: String = (0..120)
        .map(|k| {
            let x = k as f64;
            format!(
                "S{k},{:.5},{:.5},{:.5}\n",
                0.004 + 0.03 * (x * 0.7).sin(),
                0.002 + 0.01 * (x * 1.3).cos(),
                0.003 + 0.02 * (x * 0.4).sin()
            )
        })
        .collect();
    f.write(
        "data/simulated.csv",
        &format!("scenario,AS01,AS02,AS03\n{rows}"),
    );
    // AS02 is priced in an invented currency at a constant rate of 2 (the returns do not change with it).
    f.write(
        "data/assets.csv",
        &m.assets_csv()
            .replace("max_weight\n", "max_weight,currency\n")
            .replace(",0.6\n", ",0.6,\n")
            .replace("AS02,bond,0.6,\n", "AS02,bond,0.6,QMV\n"),
    );
    let rates: String = m.dates.iter().map(|d| format!("{d},2\n")).collect();
    f.write("data/rates.csv", &format!("date,QMV\n{rates}"));
    f.write(
        "shocks/set.yaml",
        "shocks:\n  - name: Equity fall\n    moves:\n      - { tag: \"class:equity\", return: -0.2 }\n",
    );
    f.write(
        "tpl/summary.typ",
        "#import \"style.typ\": *\n= Summary\nA summary of our own.\n",
    );
    f
}

/// SHA-256 of a file by coreutils `sha256sum`, a tool outside the project.
fn sha256sum(path: &std::path::Path) -> String {
    let out = std::process::Command::new("sha256sum")
        .arg(path)
        .output()
        .expect("sha256sum runs");
    String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .next()
        .expect("a digest")
        .to_string()
}

/// The archived files of one role, as the manifest lists them: (file below the pack, source, sha256).
fn listed_in_manifest(pack: &std::path::Path, role: &str) -> Vec<(String, Option<String>, String)> {
    let manifest = super::common::json(&pack.join("manifest.json"));
    manifest["inputs"]
        .as_array()
        .expect("inputs")
        .iter()
        .filter(|i| i["role"] == role)
        .map(|i| {
            (
                i["file"].as_str().unwrap().to_string(),
                i["source"].as_str().map(str::to_string),
                i["sha256"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

/// Each kind's archived copies are in the pack, under the registry's name, with the bytes of their source,
/// and listed with their digest in inputs.sha256 (whose digest is the pack id), the manifest and
/// results.json.
fn assert_archived_and_hashed(f: &Fixture, pack: &std::path::Path, kind: Input) {
    let listing = std::fs::read_to_string(pack.join("inputs.sha256")).unwrap();
    let results = super::common::json(&pack.join("results.json"));
    let files = listed_in_manifest(pack, kind.role());
    assert!(
        !files.is_empty(),
        "{kind:?}: no `{}` input in the manifest",
        kind.role()
    );
    for (file, source, sha) in &files {
        let digest = sha256sum(&pack.join(file));
        assert_eq!(&digest, sha, "{kind:?}: {file}");
        assert!(
            listing.contains(&format!("{digest}  {file}\n")),
            "{kind:?}: {file} not in the listing"
        );
        let in_results = results["inputs"].as_array().unwrap().iter().any(|i| {
            i["path"] == file.as_str() && i["sha256"] == digest.as_str() && i["role"] == kind.role()
        });
        assert!(in_results, "{kind:?}: {file} not in results.json");
        if let Some(src) = source.as_ref().filter(|_| kind != Input::Templates) {
            let name = file.strip_prefix("inputs/").unwrap();
            assert_eq!(
                name,
                kind.archived_name(std::path::Path::new(src)),
                "{kind:?}"
            );
        }
    }
    if let Some(src) = source_of(kind) {
        let copy = files
            .iter()
            .find(|(_, s, _)| s.as_deref().is_some_and(|s| s.ends_with(src)))
            .unwrap_or_else(|| panic!("{kind:?}: no copy of {src} in {files:?}"));
        assert_eq!(
            std::fs::read(pack.join(&copy.0)).unwrap(),
            std::fs::read(f.path(src)).unwrap(),
            "{kind:?}: the copy differs from {src}"
        );
    }
}

/// Rewrites inputs.sha256 and the manifest's pack id after an archived input was changed, so the digests
/// agree again and only a re-run can tell.
fn reseal(pack: &std::path::Path) {
    let listing: String = std::fs::read_to_string(pack.join("inputs.sha256"))
        .unwrap()
        .lines()
        .map(|l| {
            let name = l.split_once("  ").unwrap().1;
            format!("{}  {name}\n", sha256sum(&pack.join(name)))
        })
        .collect();
    std::fs::write(pack.join("inputs.sha256"), &listing).unwrap();
    let id = sha256sum(&pack.join("inputs.sha256"));
    let mut manifest = super::common::json(&pack.join("manifest.json"));
    manifest["pack_id"] = id.as_str().into();
    for o in manifest["outputs"].as_array_mut().unwrap() {
        if o["file"] == "inputs.sha256" {
            o["sha256"] = id.as_str().into();
            o["bytes"] = listing.len().into();
        }
    }
    std::fs::write(
        pack.join("manifest.json"),
        serde_json::to_string_pretty(&manifest).unwrap(),
    )
    .unwrap();
    reseal_bag(pack, &id);
}

/// The bag's digests too, as a tamperer who knows the layout would rewrite them: the pack id in
/// bag-info.txt, then every file the tag manifest lists.
fn reseal_bag(pack: &std::path::Path, id: &str) {
    if !pack.join("bagit.txt").exists() {
        return;
    }
    let info: String = std::fs::read_to_string(pack.join("bag-info.txt"))
        .unwrap()
        .lines()
        .map(|l| match l.starts_with("External-Identifier:") {
            true => format!("External-Identifier: {id}\n"),
            false => format!("{l}\n"),
        })
        .collect();
    std::fs::write(pack.join("bag-info.txt"), info).unwrap();
    let tags: String = std::fs::read_to_string(pack.join("tagmanifest-sha256.txt"))
        .unwrap()
        .lines()
        .map(|l| {
            let name = l.split_once("  ").unwrap().1;
            format!("{}  {name}\n", sha256sum(&pack.join(name)))
        })
        .collect();
    std::fs::write(pack.join("tagmanifest-sha256.txt"), tags).unwrap();
}

#[test]
fn every_input_the_registry_lists_is_archived_hashed_and_read_back_on_rerun() {
    let f = every_input();
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let pack = std::path::PathBuf::from(ran.stdout.lines().last().unwrap());
    for &kind in Input::ALL {
        assert_archived_and_hashed(&f, &pack, kind);
    }
    // Away from its archive and its original inputs, the pack re-runs from its archived copies alone.
    let moved = f.path("moved/fund/as-of/r1");
    std::fs::create_dir_all(moved.parent().unwrap()).unwrap();
    std::fs::rename(&pack, &moved).unwrap();
    for gone in ["data", "tpl", "shocks", "fund.yaml"] {
        let p = f.path(gone);
        let _ = std::fs::remove_dir_all(&p).or_else(|_| std::fs::remove_file(&p));
    }
    let m = moved.to_str().unwrap();
    let ran = f.run(&["verify", m, "--rerun"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    // Each archived copy in other bytes: the digests agree once resealed, and the re-run reads the changed
    // copy — it hashes to the resealed pack id, so only the outputs that record it differ.
    let original = f.path("original");
    super::common::copy_dir(&moved, &original);
    for &kind in Input::ALL {
        let (file, _, _) = listed_in_manifest(&moved, kind.role())
            .into_iter()
            .find(|(_, s, _)| match (source_of(kind), s) {
                (Some(src), Some(s)) => s.ends_with(src),
                (None, _) => true,
                (Some(_), None) => false,
            })
            .expect("archived");
        let path = moved.join(&file);
        let changed = other_bytes(kind, &std::fs::read(&path).unwrap());
        assert_ne!(changed, std::fs::read(&path).unwrap(), "{kind:?}");
        std::fs::write(&path, changed).unwrap();
        reseal(&moved);
        let ran = f.run(&["verify", m]);
        assert_eq!(ran.code, 0, "{kind:?}, resealed: {}", ran.stderr);
        let ran = f.run(&["verify", m, "--rerun"]);
        assert_eq!(ran.code, 7, "{kind:?}: {}", ran.stderr);
        assert!(
            ran.stderr.contains("results.json") && !ran.stderr.contains("inputs.sha256"),
            "{kind:?}: {}",
            ran.stderr
        );
        std::fs::remove_dir_all(&moved).unwrap();
        super::common::copy_dir(&original, &moved);
        let ran = f.run(&["verify", m]);
        assert_eq!(ran.code, 0, "{kind:?}, restored: {}", ran.stderr);
    }
}
