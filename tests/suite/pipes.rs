//! A reader that goes away: `tailpack run … | head -1` closes stdout while tailpack still has lines to
//! print. Every command must then exit with its own code — no panic message, no 101 — and the pack it
//! wrote must be intact. The standard library ignores SIGPIPE in Rust programs, so a write to a closed pipe
//! returns EPIPE, on which `print!` would panic; these tests close the pipe before the binary writes.

use super::common::{Fixture, Market, config};
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

/// Exit code of a Rust program that panicked in `main`.
const PANIC_EXIT: i32 = 101;

/// What a run with a closed pipe left behind: its exit code and what it printed on the open stream.
struct Closed {
    code: i32,
    open_text: String,
}

/// Runs the binary in `dir` with stdout (or, with `close_stderr`, stderr) a pipe whose read end is
/// closed at once, and reads the other stream to its end.
fn run_closed(dir: &Path, args: &[&str], close_stderr: bool) -> Closed {
    let mut child = Command::new(env!("CARGO_BIN_EXE_tailpack"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary runs");
    let mut open_text = String::new();
    if close_stderr {
        drop(child.stderr.take());
        let mut out = child.stdout.take().unwrap();
        out.read_to_string(&mut open_text).unwrap();
    } else {
        drop(child.stdout.take());
        let mut err = child.stderr.take().unwrap();
        err.read_to_string(&mut open_text).unwrap();
    }
    let status = child.wait().unwrap();
    Closed {
        code: status.code().unwrap_or(-1),
        open_text,
    }
}

fn fund() -> Fixture {
    let f = Fixture::new();
    let m = Market::new(3, "2021-01-01", "2024-06-28", 17);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 0\n"));
    f
}

/// The one pack folder under `out/`.
fn the_pack(f: &Fixture) -> PathBuf {
    let fund = f.path("out/test-fund-fictional");
    let as_of = std::fs::read_dir(&fund).unwrap().next().unwrap().unwrap();
    as_of.path().join("r1")
}

fn assert_quiet(c: &Closed, code: i32, what: &str) {
    assert_ne!(c.code, PANIC_EXIT, "{what}: panicked: {}", c.open_text);
    assert_eq!(
        c.code, code,
        "{what}: exit code; other stream: {}",
        c.open_text
    );
    assert!(
        !c.open_text.contains("panicked") && !c.open_text.contains("Broken pipe"),
        "{what}: {}",
        c.open_text
    );
}

#[test]
fn run_with_stdout_closed_exits_with_its_code_and_the_pack_verifies() {
    let f = fund();
    let c = run_closed(f.dir.path(), &["run", "fund.yaml", "--quiet"], false);
    assert_quiet(&c, 0, "run");
    let pack = the_pack(&f);
    assert!(pack.join("results.json").is_file() && pack.join("pack.pdf").is_file());
    let v = f.run(&["verify", pack.to_str().unwrap()]);
    assert_eq!(v.code, 0, "the pack must verify: {}", v.stderr);
    // The same run again has nothing to do: its own code 5, still with stdout closed.
    let again = run_closed(f.dir.path(), &["run", "fund.yaml", "--quiet"], false);
    assert_quiet(&again, 5, "run again");
    // With --timings the table goes to stderr; with stderr closed instead, the run still exits 0.
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.5\nAS02,0.25\nAS03,0.25\n",
    );
    let timed = run_closed(
        f.dir.path(),
        &["run", "fund.yaml", "--quiet", "--timings"],
        true,
    );
    assert_quiet(&timed, 0, "run --timings, stderr closed");
    assert!(timed.open_text.ends_with("r2\n"), "{}", timed.open_text);
}

#[test]
fn errors_with_stderr_closed_keep_their_exit_code() {
    let f = fund();
    // A bad price: the data error's own code 3, though its message has nowhere to go.
    let prices = std::fs::read_to_string(f.path("data/prices.csv")).unwrap();
    let mut lines: Vec<String> = prices.lines().map(String::from).collect();
    lines[5] = lines[5].replacen(',', ",x", 1);
    f.write("data/prices.csv", &(lines.join("\n") + "\n"));
    let c = run_closed(f.dir.path(), &["run", "fund.yaml", "--quiet"], true);
    assert_quiet(&c, 3, "run on bad data");
    let c = run_closed(f.dir.path(), &["check", "fund.yaml"], true);
    assert_quiet(&c, 3, "check on bad data");
    // A config error: code 2.
    f.write("odd.yaml", &config("analysis:\n  backtest_yeers: 0\n"));
    let c = run_closed(f.dir.path(), &["run", "odd.yaml", "--quiet"], true);
    assert_quiet(&c, 2, "run on a config with an unknown key");
    // A config file that is not there: a command-line error, code 2.
    let c = run_closed(f.dir.path(), &["run", "missing.yaml", "--quiet"], true);
    assert_quiet(&c, 2, "run on a missing config (a command-line error)");
}

#[test]
fn check_verify_and_bench_with_stdout_closed() {
    let f = fund();
    let c = run_closed(f.dir.path(), &["check", "fund.yaml"], false);
    assert_quiet(&c, 0, "check");
    assert_eq!(f.run(&["run", "fund.yaml", "--quiet"]).code, 0);
    let pack = the_pack(&f);
    let c = run_closed(f.dir.path(), &["verify", pack.to_str().unwrap()], false);
    assert_quiet(&c, 0, "verify");
    // A changed output: verify's own code 7, with stdout closed.
    std::fs::write(pack.join("summary.txt"), "changed\n").unwrap();
    let c = run_closed(f.dir.path(), &["verify", pack.to_str().unwrap()], false);
    assert_quiet(&c, 7, "verify of a changed pack");
    // bench prints its table line by line as it goes.
    let c = run_closed(
        f.dir.path(),
        &[
            "bench",
            "--sizes",
            "4x30,5x40",
            "--runs",
            "1",
            "--chosen-only",
            "--work",
            "bench-work",
        ],
        false,
    );
    assert_quiet(&c, 0, "bench");
    // Help text is printed by the argument parser.
    let c = run_closed(f.dir.path(), &["--help"], false);
    assert_quiet(&c, 0, "--help");
}

/// Through a shell pipeline, as a scheduler would run it: `tailpack run … | head -1` and `| head -c 0`
/// (which exits before tailpack prints anything, so the write certainly meets a closed pipe); the exit
/// status is tailpack's own (bash's PIPESTATUS).
#[test]
fn run_piped_into_head_keeps_exit_zero() {
    let f = fund();
    for (i, reader) in ["head -c 0", "head -1"].iter().enumerate() {
        if i > 0 {
            f.write(
                "data/holdings.csv",
                "asset,weight\nAS01,0.5\nAS02,0.25\nAS03,0.25\n",
            );
        }
        let script = format!(
            "'{}' run fund.yaml --quiet | {reader}; exit ${{PIPESTATUS[0]}}",
            env!("CARGO_BIN_EXE_tailpack")
        );
        let out = Command::new("bash")
            .args(["-c", &script])
            .current_dir(f.dir.path())
            .output()
            .expect("bash runs");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(0), "{reader}: {stderr}");
        assert!(!stderr.contains("panicked"), "{reader}: {stderr}");
        assert_eq!(String::from_utf8_lossy(&out.stdout).lines().count(), i);
    }
    let as_of = std::fs::read_dir(f.path("out/test-fund-fictional"))
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    for rev in ["r1", "r2"] {
        let v = f.run(&["verify", as_of.join(rev).to_str().unwrap()]);
        assert_eq!(v.code, 0, "{rev}: {}", v.stderr);
    }
}
