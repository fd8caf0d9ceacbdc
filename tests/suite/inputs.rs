//! Config, stress and input files at their limits, through the real binary: text bounds (a 50 MB value
//! is refused in seconds), paths that are not files, output roots inside a pack, and `check` refusing
//! what `run` refuses before its first LP. Single cases of each kind are also in the bad-input corpus.

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
