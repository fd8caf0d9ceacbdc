//! Custom templates stay inside their folder, and typesetting has a budget.
//!
//! Every run here is the real binary on a small fund with a custom template folder (`tpl/`). Templates
//! that try to reach outside the folder — symbolic links to files, folders and system files, links that
//! loop, `../` and absolute paths in `import`/`read`/`include` — must end in exit 2 naming the file, with
//! nothing of the outside in any output; templates that loop or allocate without end must end in exit 2
//! naming the template folder and the limit, within the budget, with no pack and no `.partial-*` folder
//! left. Links that stay inside the folder are followed, and the archive holds what the typesetter read.

use super::common::{Fixture, Market, config, pdf_text};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// Text no template folder holds: if it shows up in an output, a template read outside its folder.
const SECRET: &str = "OUTSIDE-THE-FOLDER-7f3a";

/// A small fund with a custom template folder `tpl/` and `report` keys `extra`; a file `secret.typ`
/// beside the config (outside `tpl/`) holds [`SECRET`].
fn fixture(extra: &str) -> Fixture {
    let f = Fixture::new();
    let m = Market::new(3, "2023-01-02", "2024-06-28", 7);
    f.small_fund(
        &m,
        &config(&format!(
            "analysis:\n  backtest_years: 0\n  daily_var_check: false\nreport:\n  templates: tpl\n{extra}"
        )),
    );
    std::fs::create_dir_all(f.path("tpl")).unwrap();
    f.write("secret.typ", &format!("{SECRET}\n"));
    f.write("outside/part.typ", &format!("{SECRET} in a folder\n"));
    f
}

/// A custom summary that shows `body` (typst markup) under the section title.
fn summary(f: &Fixture, body: &str) {
    f.write(
        "tpl/summary.typ",
        &format!("#import \"style.typ\": *\n= Summary\n{body}\n"),
    );
}

#[cfg(unix)]
fn link(target: impl AsRef<Path>, at: &Path) {
    std::os::unix::fs::symlink(target, at).unwrap();
}

/// Runs the fund and returns what it printed and how long it took.
fn run(f: &Fixture) -> (super::common::Ran, Duration) {
    let start = Instant::now();
    let ran = f.run(&["run", "fund.yaml", "--quiet"]);
    (ran, start.elapsed())
}

/// Every file below `dir`, symbolic links not followed.
fn files_below(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let Ok(rd) = std::fs::read_dir(dir) else {
        return out;
    };
    for e in rd.map(Result::unwrap) {
        let p = e.path();
        if e.file_type().unwrap().is_dir() {
            out.extend(files_below(&p));
        } else {
            out.push(p);
        }
    }
    out
}

/// The run was refused: exit 2, a message naming `names` and saying each of `says`, no panic, and no
/// pack, partial folder or outside text anywhere under the output root.
fn refused(f: &Fixture, ran: &super::common::Ran, names: &str, says: &[&str]) {
    let shown = format!("exit {}\nstderr: {}", ran.code, ran.stderr);
    assert_eq!(ran.code, 2, "{shown}");
    assert!(ran.stderr.contains(names), "must name `{names}`; {shown}");
    for s in says {
        assert!(ran.stderr.contains(s), "must say `{s}`; {shown}");
    }
    assert!(!ran.stderr.contains("panicked"), "{shown}");
    nothing_left(f);
}

/// No pack, no partial folder and no outside text under the output root.
fn nothing_left(f: &Fixture) {
    for p in files_below(&f.path("out")) {
        let name = p.to_string_lossy().into_owned();
        assert!(
            !name.contains(".partial-")
                && !name.ends_with("pack.pdf")
                && !name.ends_with("results.json"),
            "left behind: {name}"
        );
        let bytes = std::fs::read(&p).unwrap_or_default();
        assert!(
            !String::from_utf8_lossy(&bytes).contains(SECRET),
            "outside text in {name}"
        );
    }
    assert!(
        f.entries("out").iter().all(|n| n.starts_with('.')),
        "nothing visible may be left in the output root: {:?}",
        f.entries("out")
    );
}

/// The pack folder of a run that succeeded.
fn pack(ran: &super::common::Ran) -> PathBuf {
    assert_eq!(ran.code, 0, "stderr: {}", ran.stderr);
    PathBuf::from(ran.stdout.lines().last().unwrap())
}

// Symbolic links in the template folder.

#[cfg(unix)]
#[test]
fn a_link_to_a_file_outside_the_folder_is_refused_naming_it_and_its_target() {
    for target in ["abs", "rel"] {
        let f = fixture("");
        let at = f.path("tpl/notes.typ");
        match target {
            "abs" => link(f.path("secret.typ"), &at),
            _ => link("../secret.typ", &at),
        }
        summary(&f, "#include \"notes.typ\"");
        let (ran, _) = run(&f);
        refused(
            &f,
            &ran,
            "tpl/notes.typ",
            &[
                "symbolic link",
                "secret.typ",
                "outside the custom template folder",
            ],
        );
    }
}

#[cfg(unix)]
#[test]
fn a_link_to_a_folder_outside_is_refused_even_when_no_template_uses_it() {
    let f = fixture("");
    link(f.path("outside"), &f.path("tpl/shared"));
    let (ran, _) = run(&f);
    refused(
        &f,
        &ran,
        "tpl/shared",
        &["outside the custom template folder", "outside"],
    );
    // A relative link out of a subfolder, through several `..`.
    let f = fixture("");
    std::fs::create_dir_all(f.path("tpl/a/b")).unwrap();
    link("../../../outside/part.typ", &f.path("tpl/a/b/part.typ"));
    let (ran, _) = run(&f);
    refused(
        &f,
        &ran,
        "tpl/a/b/part.typ",
        &["outside the custom template folder"],
    );
}

#[cfg(unix)]
#[test]
fn links_to_system_files_and_devices_are_refused_without_reading_them() {
    // /dev/zero and /dev/urandom never end; /proc/self/environ and /etc/passwd hold what no pack may.
    for (i, target) in [
        "/etc/passwd",
        "/etc/hostname",
        "/dev/zero",
        "/dev/urandom",
        "/proc/self/environ",
        "/",
    ]
    .iter()
    .enumerate()
    {
        if !Path::new(target).exists() {
            continue;
        }
        let f = fixture("");
        let name = format!("tpl/system-{i}.txt");
        link(target, &f.path(&name));
        summary(&f, &format!("#read(\"system-{i}.txt\")"));
        let (ran, took) = run(&f);
        refused(&f, &ran, &name, &["outside the custom template folder"]);
        assert!(took < Duration::from_secs(60), "{target}: took {took:?}");
    }
}

#[cfg(unix)]
#[test]
fn link_loops_end_in_a_clear_error_not_a_runaway_scan() {
    type Make = fn(&Fixture);
    let cases: [(&str, &str, Make); 5] = [
        ("itself", "tpl/a.typ", |f| {
            link("a.typ", &f.path("tpl/a.typ"))
        }),
        ("two links", "tpl/a.typ", |f| {
            link("b.typ", &f.path("tpl/a.typ"));
            link("a.typ", &f.path("tpl/b.typ"));
        }),
        ("folder to its parent", "tpl/sub/up", |f| {
            std::fs::create_dir_all(f.path("tpl/sub")).unwrap();
            link("..", &f.path("tpl/sub/up"));
        }),
        ("folder to itself", "tpl/here", |f| {
            link(".", &f.path("tpl/here"))
        }),
        ("folder to the folder's real path", "tpl/deep/root", |f| {
            std::fs::create_dir_all(f.path("tpl/deep")).unwrap();
            link(f.path("tpl"), &f.path("tpl/deep/root"));
        }),
    ];
    for (what, name, make) in cases {
        let f = fixture("");
        make(&f);
        let (ran, took) = run(&f);
        assert!(took < Duration::from_secs(60), "{what}: took {took:?}");
        refused(&f, &ran, name, &["loop"]);
    }
}

#[cfg(unix)]
#[test]
fn links_fanning_out_inside_the_folder_cannot_make_the_scan_run_away() {
    // d0 holds two links to d1, d1 two to d2, … d24 is empty: 2^24 paths, no loop and no file.
    let f = fixture("");
    for i in 0..25 {
        std::fs::create_dir_all(f.path(&format!("tpl/d{i}"))).unwrap();
    }
    for i in 0..24 {
        for name in ["a", "b"] {
            link(
                format!("../d{}", i + 1),
                &f.path(&format!("tpl/d{i}/{name}")),
            );
        }
    }
    let (ran, took) = run(&f);
    assert!(took < Duration::from_secs(60), "took {took:?}");
    refused(&f, &ran, "tpl/d", &["10000 files and folders"]);
    // Nesting deeper than 32 folders, without links.
    let f = fixture("");
    let deep: String = (0..40).map(|i| format!("n{i}/")).collect();
    f.write(&format!("tpl/{deep}x.typ"), "x");
    let (ran, _) = run(&f);
    refused(&f, &ran, "tpl/n0/n1", &["more than 32 folders deep"]);
}

#[cfg(unix)]
#[test]
fn a_dangling_link_and_a_named_pipe_are_refused_without_waiting() {
    let f = fixture("");
    link("no-such-file.typ", &f.path("tpl/gone.typ"));
    let (ran, _) = run(&f);
    refused(&f, &ran, "tpl/gone.typ", &["points to nothing"]);
    // A FIFO would block a reader for ever; its kind is named instead.
    let f = fixture("");
    let made = std::process::Command::new("mkfifo")
        .arg(f.path("tpl/pipe.typ"))
        .status()
        .expect("mkfifo (coreutils) runs");
    assert!(made.success());
    let (ran, took) = run(&f);
    assert!(took < Duration::from_secs(60), "took {took:?}");
    refused(&f, &ran, "tpl/pipe.typ", &["a named pipe (FIFO)"]);
}

#[cfg(unix)]
#[test]
fn links_that_stay_inside_the_folder_are_followed_and_archived_as_read() {
    let f = fixture("");
    let body = "Summary text reached through a link inside the folder.";
    // An absolute import: the file is typeset as `/summary.typ` (the link's name) and could also be
    // reached as `/parts/summary.typ`.
    f.write(
        "tpl/parts/summary.typ",
        &format!("#import \"/style.typ\": *\n= Summary\n{body}\n"),
    );
    link("parts/summary.typ", &f.path("tpl/summary.typ"));
    link("parts", &f.path("tpl/alias"));
    let (ran, _) = run(&f);
    let dir = pack(&ran);
    let text = pdf_text(&dir.join("pack.pdf"))
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ");
    assert!(text.contains(body), "the linked summary must be typeset");
    let want = std::fs::read(f.path("tpl/parts/summary.typ")).unwrap();
    for archived in ["summary.typ", "parts/summary.typ", "alias/summary.typ"] {
        let got = std::fs::read(dir.join("inputs/templates").join(archived)).unwrap();
        assert_eq!(
            got, want,
            "inputs/templates/{archived} must hold the file read"
        );
    }
    let verified = f.run(&["verify", dir.to_str().unwrap(), "--rerun"]);
    assert_eq!(verified.code, 0, "{}", verified.stderr);
}

#[cfg(unix)]
#[test]
fn a_template_folder_that_is_itself_a_link_is_the_folder_it_names() {
    let f = fixture("");
    std::fs::remove_dir(f.path("tpl")).unwrap();
    let body = "Summary from a linked template folder.";
    f.write(
        "elsewhere/templates/summary.typ",
        &format!("#import \"style.typ\": *\n= Summary\n{body}\n"),
    );
    link(f.path("elsewhere/templates"), &f.path("tpl"));
    let (ran, _) = run(&f);
    let dir = pack(&ran);
    assert!(pdf_text(&dir.join("pack.pdf")).contains("linked template folder"));
    assert!(dir.join("inputs/templates/summary.typ").is_file());
}

#[test]
fn hidden_files_are_neither_readable_nor_archived() {
    let f = fixture("");
    f.write("tpl/.draft.typ", &format!("{SECRET}\n"));
    summary(&f, "#include \".draft.typ\"");
    let (ran, _) = run(&f);
    refused(
        &f,
        &ran,
        "tpl/summary.typ",
        &["file not found", ".draft.typ"],
    );
    // Without the include the run goes through, and the hidden file is not in the archive.
    summary(&f, "Plain summary.");
    let (ran, _) = run(&f);
    let dir = pack(&ran);
    let archived: Vec<PathBuf> = files_below(&dir.join("inputs/templates"));
    assert!(
        archived
            .iter()
            .all(|p| !p.to_string_lossy().contains(".draft")),
        "{archived:?}"
    );
}

#[cfg(unix)]
#[test]
fn names_no_template_path_can_name_are_refused() {
    use std::os::unix::ffi::OsStrExt;
    let f = fixture("");
    f.write("tpl/a\\b.typ", "x");
    let (ran, _) = run(&f);
    refused(&f, &ran, "tpl/a\\b.typ", &["backslash"]);
    let f = fixture("");
    let name = std::ffi::OsStr::from_bytes(b"bad-\xff.typ");
    std::fs::write(f.path("tpl").join(name), "x").unwrap();
    let (ran, _) = run(&f);
    refused(&f, &ran, "tpl/bad-", &["not UTF-8"]);
}

#[test]
fn a_template_file_may_not_take_the_name_of_generated_data() {
    for name in ["tpl/data/report.json", "tpl/data/results.json"] {
        let f = fixture("");
        f.write(name, "{}");
        let (ran, _) = run(&f);
        refused(
            &f,
            &ran,
            name,
            &["has the name of a file tailpack generates"],
        );
    }
}

#[test]
fn a_template_folder_larger_than_the_memory_budget_is_refused_before_it_is_read_whole() {
    let f = fixture("  typeset_memory_mb: 256\n");
    // A sparse file of 300 MB: cheap to make, and more than the budget of 256 MB.
    let big = std::fs::File::create(f.path("tpl/big.otf")).unwrap();
    big.set_len(300 << 20).unwrap();
    let (ran, _) = run(&f);
    refused(
        &f,
        &ran,
        "tpl/big.otf",
        &["over 256 MB", "report.typeset_memory_mb"],
    );
}

// Paths in templates.

#[test]
fn templates_cannot_reach_outside_the_folder_by_relative_paths() {
    for (call, file) in [
        ("#include \"../secret.typ\"", "tpl/summary.typ"),
        ("#import \"../secret.typ\": *", "tpl/summary.typ"),
        ("#read(\"../../../../../../etc/passwd\")", "tpl/summary.typ"),
        ("#image(\"/data/../../secret.png\")", "tpl/summary.typ"),
        ("#read(\"sub/../../secret.typ\")", "tpl/summary.typ"),
    ] {
        let f = fixture("");
        summary(&f, call);
        let (ran, _) = run(&f);
        refused(
            &f,
            &ran,
            &format!("template {file}, line 3"),
            &["would escape the template folder", "report.templates"],
        );
        // typst's own hint speaks of a project root and a `--root` argument tailpack does not have.
        for word in ["--root", "project root", "sandbox"] {
            assert!(!ran.stderr.contains(word), "`{word}` in: {}", ran.stderr);
        }
    }
}

#[test]
fn absolute_paths_and_packages_name_what_templates_can_read() {
    for (call, says) in [
        (
            "#read(\"/etc/passwd\")",
            "/etc/passwd is not a file of the custom template folder",
        ),
        (
            "#read(\"/proc/self/environ\")",
            "is not a file of the custom template folder",
        ),
        (
            "#include \"/secret.typ\"",
            "/secret.typ is not a file of the custom template folder",
        ),
        (
            "#image(\"/etc/hostname\")",
            "is not a file of the custom template folder",
        ),
        (
            "#import \"@preview/example:0.1.0\": *",
            "does not fetch typst packages",
        ),
    ] {
        let f = fixture("");
        summary(&f, call);
        let (ran, _) = run(&f);
        refused(&f, &ran, "template tpl/summary.typ, line 3", &[says]);
        assert!(!ran.stderr.contains("searched at"), "{}", ran.stderr);
    }
}

// The typesetting budget.

/// Templates that never finish; each must be stopped at the time budget.
const LOOPS: [(&str, &str); 3] = [
    (
        "nested for loops, 10^10 iterations",
        "#for i in range(100000) { for j in range(100000) { } }",
    ),
    (
        "nested while loops under typst's per-loop limit",
        "#let (i, j, k) = (0, 0, 0)\n#while i < 9999 { i += 1; j = 0; while j < 9999 { j += 1; k = 0; while k < 9999 { k += 1 } } }",
    ),
    (
        "a fold over a long range",
        "#range(3000000).fold(0, (a, x) => range(1000).fold(a, (b, y) => b + x * y))",
    ),
];

#[test]
fn looping_templates_stop_at_the_time_budget_with_exit_2() {
    for (what, body) in LOOPS {
        let f = fixture("  typeset_seconds: 3\n");
        summary(&f, body);
        let (ran, took) = run(&f);
        assert!(took < Duration::from_secs(45), "{what}: took {took:?}");
        refused(
            &f,
            &ran,
            "tpl (custom template folder)",
            &[
                "did not finish within 3 s",
                "report.typeset_seconds",
                "fund.yaml",
            ],
        );
    }
}

/// Templates that ask for far more memory than any pack needs.
const HOGS: [(&str, &str); 5] = [
    ("a range of 2·10^9 numbers", "#let a = range(2000000000)"),
    (
        "an array repeated 2·10^9 times",
        "#let a = (1, 2) * 1000000000",
    ),
    (
        "a string doubled 40 times",
        "#let s = \"x\"\n#for i in range(40) { s = s + s }",
    ),
    (
        "a string repeated 3·10^9 times",
        "#let s = \"abc\" * 1000000000\n#s.len()",
    ),
    (
        "an array grown by doubling",
        "#let a = (0,)\n#for i in range(40) { a = a + a }\n#a.len()",
    ),
];

#[test]
fn allocating_templates_stop_at_the_memory_budget_with_exit_2() {
    for (what, body) in HOGS {
        let f = fixture("  typeset_memory_mb: 1024\n");
        summary(&f, body);
        let (ran, took) = run(&f);
        assert!(took < Duration::from_secs(120), "{what}: took {took:?}");
        assert_eq!(ran.code, 2, "{what}: {}", ran.stderr);
        // typst refuses some sizes itself (a template error with its line); the rest hit the budget.
        let budget = ran.stderr.contains("more than 1024 MB, the memory budget")
            && ran.stderr.contains("report.typeset_memory_mb")
            && ran.stderr.contains("tpl (custom template folder)");
        let typst = ran.stderr.contains("template tpl/summary.typ, line");
        assert!(budget || typst, "{what}: {}", ran.stderr);
        refused(&f, &ran, "tpl", &[]);
    }
}

#[test]
fn funds_of_one_config_each_stop_at_the_budget_and_leave_nothing() {
    let f = fixture("  typeset_seconds: 2\n");
    summary(&f, LOOPS[0].1);
    let base = std::fs::read_to_string(f.path("fund.yaml")).unwrap();
    f.write(
        "fund.yaml",
        &format!(
            "{base}funds:\n  - fund: {{ name: Alpha Mandate (fictional), short_name: alpha }}\n  - fund: {{ name: Beta Mandate (fictional), short_name: beta }}\n"
        ),
    );
    let (ran, took) = run(&f);
    assert_eq!(ran.code, 2, "{}\n{}", ran.stdout, ran.stderr);
    assert!(took < Duration::from_secs(60), "took {took:?}");
    for fund in ["alpha", "beta"] {
        assert!(
            ran.stdout.contains(&format!("{fund}: FAILED"))
                && ran.stdout.contains("did not finish within 2 s"),
            "{}",
            ran.stdout
        );
    }
    for p in files_below(&f.path("out")) {
        let name = p.to_string_lossy().into_owned();
        assert!(
            !name.contains(".partial-") && !name.ends_with("pack.pdf"),
            "left behind: {name}"
        );
    }
}

#[test]
fn deep_recursion_and_nesting_end_in_a_template_error() {
    for body in [
        "#let f(n) = f(n + 1)\n#f(0)",
        "#let c = [x]\n#for i in range(200000) { c = box(c) }\n#c",
        "#let a = ()\n#for i in range(200000) { a = (a,) }\n#repr(a).len()",
    ] {
        let f = fixture("  typeset_seconds: 60\n");
        summary(&f, body);
        let (ran, _) = run(&f);
        refused(&f, &ran, "tpl", &["template "]);
        // typst's own depth limits, or the stack of the typesetter child running out.
        assert!(
            ran.stderr.contains("maximum") || ran.stderr.contains("ran out of stack"),
            "{body}: {}",
            ran.stderr
        );
    }
}

#[cfg(target_os = "linux")]
#[test]
fn killing_a_run_while_it_typesets_also_ends_the_typesetter_and_leaves_nothing() {
    let f = fixture("  typeset_seconds: 600\n");
    summary(&f, LOOPS[0].1);
    let mut parent = std::process::Command::new(env!("CARGO_BIN_EXE_tailpack"))
        .args(["run", "fund.yaml", "--quiet"])
        .current_dir(f.dir.path())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let pid = parent.id();
    let start = Instant::now();
    let child = loop {
        if let Some(c) = children_of(pid).into_iter().next() {
            break c;
        }
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "no typesetter started"
        );
        std::thread::sleep(Duration::from_millis(50));
    };
    parent.kill().unwrap();
    parent.wait().unwrap();
    let start = Instant::now();
    while Path::new(&format!("/proc/{child}")).exists() && !is_zombie(child) {
        assert!(
            start.elapsed() < Duration::from_secs(10),
            "the typesetter {child} outlived the run"
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    nothing_left(&f);
}

/// Process ids whose parent is `pid` (from /proc/<id>/stat, field 4).
#[cfg(target_os = "linux")]
fn children_of(pid: u32) -> Vec<u32> {
    std::fs::read_dir("/proc")
        .unwrap()
        .filter_map(|e| e.ok()?.file_name().to_str()?.parse::<u32>().ok())
        .filter(|id| {
            std::fs::read_to_string(format!("/proc/{id}/stat"))
                .ok()
                .and_then(|s| {
                    let after = s.rsplit_once(')')?.1.to_string();
                    after.split_whitespace().nth(1)?.parse::<u32>().ok()
                })
                == Some(pid)
        })
        .collect()
}

#[cfg(target_os = "linux")]
fn is_zombie(pid: u32) -> bool {
    std::fs::read_to_string(format!("/proc/{pid}/stat"))
        .map(|s| {
            s.rsplit_once(')')
                .is_some_and(|(_, a)| a.trim_start().starts_with('Z'))
        })
        .unwrap_or(true)
}

#[test]
fn budget_keys_out_of_range_or_of_the_wrong_type_are_config_errors() {
    for (yaml, key, says) in [
        (
            "  typeset_seconds: 0\n",
            "report.typeset_seconds",
            "between 1 and 3600",
        ),
        (
            "  typeset_seconds: 3601\n",
            "report.typeset_seconds",
            "between 1 and 3600",
        ),
        (
            "  typeset_seconds: -5\n",
            "report.typeset_seconds",
            "invalid type",
        ),
        (
            "  typeset_seconds: ten\n",
            "report.typeset_seconds",
            "invalid type",
        ),
        (
            "  typeset_seconds: 1.5\n",
            "report.typeset_seconds",
            "invalid type",
        ),
        (
            "  typeset_memory_mb: 0\n",
            "report.typeset_memory_mb",
            "between 256 and",
        ),
        (
            "  typeset_memory_mb: 255\n",
            "report.typeset_memory_mb",
            "between 256 and",
        ),
        (
            "  typeset_memory_mb: 2000000\n",
            "report.typeset_memory_mb",
            "between 256 and",
        ),
        (
            "  typeset_memory_mb: 99999999999999999999999\n",
            "report.typeset_memory_mb",
            "invalid type",
        ),
        (
            "  typeset_secs: 10\n",
            "typeset_secs",
            "did you mean `typeset_seconds`?",
        ),
    ] {
        let f = fixture(yaml);
        let (ran, _) = run(&f);
        assert_eq!(ran.code, 2, "{yaml}: {}", ran.stderr);
        assert!(
            ran.stderr.contains("fund.yaml")
                && ran.stderr.contains(key)
                && ran.stderr.contains(says),
            "{yaml}: {}",
            ran.stderr
        );
        nothing_left(&f);
    }
}

#[test]
fn the_budget_defaults_are_the_ones_the_readme_states() {
    let d = tailpack::config::RawReport::default();
    let readme = std::fs::read_to_string(super::common::repo().join("README.md")).unwrap();
    for row in [
        format!("| `report.typeset_seconds` | {} |", d.typeset_seconds),
        format!("| `report.typeset_memory_mb` | {} |", d.typeset_memory_mb),
    ] {
        assert!(
            readme.contains(&row),
            "README config reference lacks `{row}`"
        );
    }
}

#[test]
fn a_pdf_typeset_in_a_child_is_byte_identical_to_one_typeset_in_process() {
    // This test process is not the tailpack binary, so the library typesets in-process here, while the
    // binary typesets in its child: same inputs, same bytes.
    let f = fixture("");
    summary(&f, "Custom summary.");
    let ran = f.run(&["run", "fund.yaml", "--quiet", "--out", "by-binary"]);
    let a = pack(&ran).join("pack.pdf");
    let opts = tailpack::commands::RunOptions {
        overrides: tailpack::config::Overrides {
            out: Some(f.path("in-process")),
            ..Default::default()
        },
        ..Default::default()
    };
    let here = std::env::current_dir().unwrap();
    let report = tailpack::commands::run(
        &f.path("fund.yaml"),
        &opts,
        &tailpack::commands::Progress::new(true),
    )
    .unwrap();
    assert_eq!(std::env::current_dir().unwrap(), here);
    let b = PathBuf::from(report.text.lines().last().unwrap()).join("pack.pdf");
    assert_eq!(
        std::fs::read(&a).unwrap(),
        std::fs::read(&b).unwrap(),
        "{} and {} differ",
        a.display(),
        b.display()
    );
}

// What a killed run leaves.

#[test]
fn a_leftover_partial_folder_is_ignored_by_verify_and_the_index_and_removed_by_the_next_run() {
    let f = fixture("");
    summary(&f, "First summary.");
    let r1 = pack(&run(&f).0);
    // What a run killed while writing leaves: a hidden folder with some outputs in it.
    let leftover = r1.parent().unwrap().join(".partial-r2-999999");
    std::fs::create_dir_all(leftover.join("inputs")).unwrap();
    std::fs::copy(r1.join("results.json"), leftover.join("results.json")).unwrap();
    std::fs::write(leftover.join("manifest.json"), "{}").unwrap();
    let verified = f.run(&["verify", r1.to_str().unwrap()]);
    assert_eq!(verified.code, 0, "{}", verified.stderr);
    // A run for another month rebuilds the index while the leftover is there.
    let other = f.run(&["run", "fund.yaml", "--quiet", "--as-of", "2024-05-31"]);
    pack(&other);
    let index = std::fs::read_to_string(f.path("out/index.json")).unwrap();
    assert!(
        !index.contains(".partial") && !index.contains("999999"),
        "{index}"
    );
    assert!(
        leftover.exists(),
        "only a run of the same fund and month removes it"
    );
    summary(&f, "Second summary.");
    let r2 = pack(&run(&f).0);
    assert!(r2.ends_with("r2"), "{}", r2.display());
    assert!(
        !leftover.exists(),
        "the next run removes what a killed run left"
    );
    let index = std::fs::read_to_string(f.path("out/index.json")).unwrap();
    assert!(!index.contains(".partial"), "{index}");
    for p in [&r1, &r2] {
        let verified = f.run(&["verify", p.to_str().unwrap()]);
        assert_eq!(verified.code, 0, "{}", verified.stderr);
    }
}
