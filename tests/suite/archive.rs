//! The archive: revisions, no-op re-runs, the index, verification of every kind of file, re-runs from the
//! archived inputs, atomic writes under SIGKILL, and the archive lock.

use super::common::{Fixture, Market, config};
use std::path::PathBuf;

fn fixture() -> (Fixture, Market) {
    let f = Fixture::new();
    let m = Market::new(4, "2021-01-01", "2024-06-28", 21);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 1\n"));
    (f, m)
}

fn last_line(s: &str) -> PathBuf {
    PathBuf::from(s.lines().last().expect("output"))
}

#[test]
fn identical_inputs_are_a_no_op_and_changed_inputs_make_the_next_revision() {
    let (f, m) = fixture();
    let first = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(first.code, 0, "{}", first.stderr);
    let r1 = last_line(&first.stdout);
    assert!(r1.ends_with("r1"), "{}", r1.display());
    let again = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(again.code, 5, "nothing to do: {}", again.stdout);
    assert!(again.stdout.contains("nothing to do") && last_line(&again.stdout) == r1);
    f.write(
        "data/holdings.csv",
        "asset,weight\nAS01,0.4\nAS02,0.2\nAS03,0.2\nAS04,0.2\n",
    );
    let second = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(second.code, 0, "{}", second.stderr);
    let r2 = last_line(&second.stdout);
    assert!(r2.ends_with("r2"));
    let note = std::fs::read_to_string(r2.join("revision-note.txt")).unwrap();
    assert!(
        note.contains("inputs/holdings.csv") && !note.contains("inputs/prices.csv"),
        "{note}"
    );
    let index = std::fs::read_to_string(f.path("out/index.csv")).unwrap();
    assert_eq!(index.lines().count(), 3, "{index}");
    assert!(
        index
            .lines()
            .nth(2)
            .unwrap()
            .starts_with("test-fund-fictional,2024-06-28,2,")
    );
    let _ = m;
}

#[test]
fn pack_id_is_the_sha256_of_the_inputs_listing() {
    // Recomputed with a general-purpose tool (coreutils sha256sum), as README tells an auditor to.
    let (f, _) = fixture();
    let pack = last_line(&f.run(&["run", "fund.yaml", "--quiet"]).stdout);
    let check = std::process::Command::new("sha256sum")
        .args(["-c", "inputs.sha256"])
        .current_dir(&pack)
        .output()
        .unwrap();
    assert!(
        check.status.success(),
        "{}",
        String::from_utf8_lossy(&check.stdout)
    );
    let sum = std::process::Command::new("sha256sum")
        .arg("inputs.sha256")
        .current_dir(&pack)
        .output()
        .unwrap();
    let id = String::from_utf8_lossy(&sum.stdout)
        .split_whitespace()
        .next()
        .unwrap()
        .to_string();
    let results = super::common::json(&pack.join("results.json"));
    assert_eq!(results["pack_id"], id.as_str());
    assert_eq!(
        super::common::json(&pack.join("manifest.json"))["pack_id"],
        id.as_str()
    );
}

#[test]
fn verify_names_every_kind_of_tampered_file() {
    let (f, _) = fixture();
    let pack = last_line(&f.run(&["run", "fund.yaml", "--quiet"]).stdout);
    let p = pack.to_str().unwrap();
    assert_eq!(f.run(&["verify", p]).code, 0);
    for (file, how) in [
        ("inputs/prices.csv", "changed"),
        ("inputs/config.yaml", "changed"),
        ("pack.pdf", "changed"),
        ("results.json", "changed"),
        ("manifest.json", "changed"),
        ("inputs.sha256", "pack id"),
        ("extra.txt", "not listed"),
    ] {
        let path = pack.join(file);
        let before = std::fs::read(&path).ok();
        let mut bytes = before.clone().unwrap_or_default();
        bytes.extend_from_slice(b"\n");
        std::fs::write(&path, &bytes).unwrap();
        let ran = f.run(&["verify", p]);
        assert_eq!(ran.code, 7, "{file}: {}", ran.stderr);
        assert!(
            ran.stderr.contains(file) && ran.stderr.contains(how),
            "{file}: {}",
            ran.stderr
        );
        match before {
            Some(b) => std::fs::write(&path, b).unwrap(),
            None => std::fs::remove_file(&path).unwrap(),
        }
        assert_eq!(f.run(&["verify", p]).code, 0, "restored {file}");
    }
}

#[test]
fn rerun_from_archived_inputs_elsewhere_is_byte_identical() {
    let (f, _) = fixture();
    let pack = last_line(&f.run(&["run", "fund.yaml", "--quiet"]).stdout);
    // Move the pack to another place and delete the original inputs: the archived copies must suffice.
    let moved = f.path("elsewhere/r1");
    std::fs::create_dir_all(moved.parent().unwrap()).unwrap();
    std::fs::rename(&pack, &moved).unwrap();
    std::fs::remove_dir_all(f.path("data")).unwrap();
    let ran = f.run(&["verify", moved.to_str().unwrap(), "--rerun"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(ran.stdout.contains("identical outputs"));
    // Outputs carry no machine-specific path, so a re-run on another clone or machine at the same commit
    // gives the same bytes: the fixture's temporary folder appears in no output (the manifest, which
    // records where inputs came from, is not an output).
    let here = f.dir.path().to_string_lossy().into_owned();
    for name in [
        "results.json",
        "summary.txt",
        "scenarios.csv",
        "weights.csv",
    ] {
        assert!(
            !std::fs::read_to_string(moved.join(name))
                .unwrap()
                .contains(&here),
            "{name} mentions {here}"
        );
    }
    assert!(!super::common::pdf_text(&moved.join("pack.pdf")).contains(&here));
}

#[test]
fn a_killed_run_leaves_no_visible_pack_and_the_next_run_succeeds() {
    let f = Fixture::new();
    let m = Market::new(8, "2016-01-01", "2024-06-28", 23);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 6\n"));
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_tailpack"))
        .args(["run", "fund.yaml", "--quiet"])
        .current_dir(f.dir.path())
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    std::thread::sleep(std::time::Duration::from_millis(400));
    child.kill().unwrap(); // SIGKILL on Unix
    let status = child.wait().unwrap();
    assert!(
        status.code().is_none(),
        "the run finished before it could be killed; make the fixture larger"
    );
    let folder = f.path("out/test-fund-fictional/2024-06-28");
    let visible: Vec<String> = f.entries("out/test-fund-fictional/2024-06-28");
    assert!(
        visible.is_empty(),
        "visible after SIGKILL: {visible:?} in {}",
        folder.display()
    );
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(last_line(&ran.stdout).ends_with("r1"));
    assert!(
        !f.entries("out/test-fund-fictional/2024-06-28")
            .iter()
            .any(|n| n.starts_with(".partial"))
    );
}

#[test]
fn a_held_archive_lock_makes_the_second_run_wait_then_exit_6() {
    let (f, _) = fixture();
    std::fs::create_dir_all(f.path("out")).unwrap();
    let lock = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(f.path("out/.tailpack.lock"))
        .unwrap();
    lock.lock().unwrap();
    let ran = f.run(&["run", "fund.yaml", "--quiet", "--lock-timeout", "1"]);
    assert_eq!(ran.code, 6, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("waiting for another tailpack run")
            && ran.stderr.contains("archive lock"),
        "{}",
        ran.stderr
    );
    lock.unlock().unwrap();
    assert_eq!(
        f.run(&["run", "fund.yaml", "--quiet", "--lock-timeout", "1"])
            .code,
        0
    );
}

#[test]
fn several_funds_build_in_parallel_and_one_failure_does_not_stop_the_others() {
    let f = Fixture::new();
    let m = Market::new(4, "2021-01-01", "2024-06-28", 29);
    f.small_fund(&m, &config("analysis:\n  backtest_years: 0\n"));
    f.write("data/holdings-b.csv", "asset,weight\nAS01,0.7\nAS02,0.3\n");
    f.write(
        "data/holdings-bad.csv",
        "asset,weight\nAS01,0.5\nNOPE,0.5\n",
    );
    let base = std::fs::read_to_string(f.path("fund.yaml")).unwrap();
    let multi = format!(
        "{base}funds:\n  - fund: {{ name: Alpha Mandate (fictional), short_name: alpha }}\n  - fund: {{ name: Beta Mandate (fictional), short_name: beta }}\n    holdings: data/holdings-b.csv\n    limits: {{ turnover_max: 0.5 }}\n  - fund: {{ name: Broken Mandate (fictional), short_name: broken }}\n    holdings: data/holdings-bad.csv\n"
    );
    f.write("multi.yaml", &multi);
    let ran = f.run(&["run", "multi.yaml", "--quiet"]);
    assert_eq!(
        ran.code, 3,
        "the failed fund's data error sets the exit code: {}\n{}",
        ran.stdout, ran.stderr
    );
    assert!(
        ran.stdout.contains("alpha: ok") && ran.stdout.contains("beta: ok"),
        "{}",
        ran.stdout
    );
    assert!(
        ran.stdout.contains("broken: FAILED") && ran.stdout.contains("NOPE"),
        "{}",
        ran.stdout
    );
    assert!(
        ran.stdout
            .contains("3 funds: 2 ok or unchanged, 1 with problems")
    );
    let alpha = super::common::json(&f.path("out/alpha/2024-06-28/r1/results.json"));
    let beta = super::common::json(&f.path("out/beta/2024-06-28/r1/results.json"));
    assert_eq!(beta["constraints"]["turnover_max"], 0.5);
    assert!(alpha["constraints"]["turnover_max"].is_null());
    assert_eq!(beta["constraints"]["current"]["AS01"], 0.7);
    let index = std::fs::read_to_string(f.path("out/index.csv")).unwrap();
    assert!(
        index.contains("alpha,2024-06-28,1,") && index.contains("beta,2024-06-28,1,"),
        "{index}"
    );
    // Each fund's pack re-runs from its archived inputs (the archived config lists all funds).
    let v = f.run(&[
        "verify",
        f.path("out/beta/2024-06-28/r1").to_str().unwrap(),
        "--rerun",
    ]);
    assert_eq!(v.code, 0, "{}", v.stderr);
}

/// Plants an entry with `make`, expects `verify` to fail (exit 7) naming `name`, then removes it.
fn planted_fails(f: &Fixture, pack: &std::path::Path, name: &str, make: &dyn Fn(&std::path::Path)) {
    let p = pack.to_str().unwrap();
    let path = pack.join(name);
    make(&path);
    let ran = f.run(&["verify", p]);
    assert_eq!(ran.code, 7, "{name} must be reported: {}", ran.stderr);
    assert!(ran.stderr.contains(name), "{name}: {}", ran.stderr);
    let meta = std::fs::symlink_metadata(&path).unwrap();
    if meta.is_dir() {
        std::fs::remove_dir_all(&path).unwrap();
    } else {
        std::fs::remove_file(&path).unwrap();
    }
    assert_eq!(f.run(&["verify", p]).code, 0, "removed {name}");
}

#[test]
fn every_entry_of_a_pack_hidden_or_not_at_any_depth_is_listed_or_reported() {
    let (f, _) = fixture();
    let pack = last_line(&f.run(&["run", "fund.yaml", "--quiet"]).stdout);
    let file = |p: &std::path::Path| std::fs::write(p, "x\n").unwrap();
    let folder = |p: &std::path::Path| std::fs::create_dir_all(p).unwrap();
    let folder_with_file = |p: &std::path::Path| {
        std::fs::create_dir_all(p).unwrap();
        std::fs::write(p.join("notes.txt"), "x\n").unwrap();
    };
    for name in [
        "inputs/.hidden",
        "inputs/templates/.hidden.typ",
        "inputs/extra.csv",
        ".hidden-top",
        ".signoff.json.tmp",
    ] {
        planted_fails(&f, &pack, name, &file);
    }
    for name in [
        "extra",
        ".extra",
        "inputs/empty",
        "inputs/.git",
        "inputs/templates/sub",
    ] {
        planted_fails(&f, &pack, name, &folder);
    }
    for name in ["attachments", ".cache", "inputs/more"] {
        planted_fails(&f, &pack, name, &folder_with_file);
    }
    // Symbolic links, even to a listed file of the same pack, and special files.
    #[cfg(unix)]
    {
        let link_to_results =
            |p: &std::path::Path| std::os::unix::fs::symlink(pack.join("results.json"), p).unwrap();
        planted_fails(&f, &pack, "results-link.json", &link_to_results);
        planted_fails(&f, &pack, "inputs/link.csv", &link_to_results);
        let loop_link = |p: &std::path::Path| std::os::unix::fs::symlink(p, p).unwrap();
        planted_fails(&f, &pack, "inputs/loop", &loop_link);
        let fifo = |p: &std::path::Path| {
            assert!(
                std::process::Command::new("mkfifo")
                    .arg(p)
                    .status()
                    .unwrap()
                    .success()
            )
        };
        planted_fails(&f, &pack, "inputs/pipe", &fifo);
    }
    // A listed output replaced by a symbolic link to a copy with the same bytes is reported too.
    #[cfg(unix)]
    {
        let results = pack.join("results.json");
        let copy = f.path("results-copy.json");
        std::fs::copy(&results, &copy).unwrap();
        std::fs::remove_file(&results).unwrap();
        std::os::unix::fs::symlink(&copy, &results).unwrap();
        let ran = f.run(&["verify", pack.to_str().unwrap()]);
        assert_eq!(ran.code, 7, "{}", ran.stderr);
        assert!(ran.stderr.contains("results.json"), "{}", ran.stderr);
    }
}

#[test]
fn listings_that_point_outside_the_pack_are_reported() {
    let (f, _) = fixture();
    let pack = last_line(&f.run(&["run", "fund.yaml", "--quiet"]).stdout);
    // A manifest output named with a path outside the pack folder (digest of the outside file given).
    let outside = f.write("secret.txt", "outside\n");
    let mut manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(pack.join("manifest.json")).unwrap())
            .unwrap();
    let digest = {
        use sha2::Digest;
        sha2::Sha256::digest(std::fs::read(&outside).unwrap())
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect::<String>()
    };
    manifest["outputs"]
        .as_array_mut()
        .unwrap()
        .push(serde_json::json!({"file": "../../../../secret.txt", "sha256": digest}));
    std::fs::write(pack.join("manifest.json"), manifest.to_string()).unwrap();
    let ran = f.run(&["verify", pack.to_str().unwrap()]);
    assert_eq!(ran.code, 7, "{}", ran.stderr);
    assert!(
        ran.stderr.contains("../../../../secret.txt"),
        "{}",
        ran.stderr
    );
}
