//! The pipeline's modules import one way. `pipeline/lib.rs` lists the stages in data-flow order and names
//! the cross-cutting modules; a file of one stage may import only earlier stages and the cross-cutting
//! modules, and a cross-cutting module only other cross-cutting ones. So no import cycle can form between
//! files of different stages, and a new import against the flow fails here naming the file. Unit tests
//! (`#[cfg(test)] mod tests`) are left out: they may reach further to build their cases.

use super::common::repo;
use std::path::Path;

/// The stages in the order of `lib.rs`'s list, and the cross-cutting modules of its last paragraph.
fn declared() -> (Vec<String>, Vec<String>) {
    let lib = std::fs::read_to_string(repo().join("pipeline/lib.rs")).unwrap();
    let named = |line: &str| -> Vec<String> {
        line.split("[`")
            .skip(1)
            .filter_map(|s| s.split_once("`]").map(|(m, _)| m.to_string()))
            .collect()
    };
    let stages: Vec<String> = lib
        .lines()
        .filter_map(|l| l.strip_prefix("//! - "))
        .filter_map(|l| named(l).into_iter().next())
        .collect();
    let cross_text: String = lib
        .lines()
        .skip_while(|l| !l.starts_with("//! Cross-cutting"))
        .take_while(|l| l.starts_with("//!"))
        .collect::<Vec<_>>()
        .join(" ");
    (stages, named(&cross_text))
}

/// The top-level modules a source text refers to as `crate::name` (also inside `use crate::{…}`).
fn imports(text: &str) -> Vec<String> {
    let code: String = text
        .split("#[cfg(test)]\nmod tests")
        .next()
        .unwrap()
        .lines()
        .map(|l| l.split("//").next().unwrap())
        .collect::<Vec<_>>()
        .join("\n");
    let mut out: Vec<String> = Vec::new();
    let mut add = |name: &str| {
        let name: String = name
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_')
            .collect();
        if !name.is_empty() && !out.contains(&name) {
            out.push(name);
        }
    };
    for part in code.split("crate::").skip(1) {
        if let Some(group) = part.strip_prefix('{') {
            let group = group.split('}').next().unwrap();
            for item in group.split(',') {
                add(item.trim());
            }
        } else {
            add(part);
        }
    }
    out
}

fn rust_files(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

#[test]
fn stages_import_only_earlier_stages() {
    let (stages, cross) = declared();
    assert!(
        stages.len() >= 10 && cross.contains(&"error".to_string()),
        "lib.rs lists the stages and the cross-cutting modules: {stages:?} {cross:?}"
    );
    let root = repo().join("pipeline");
    let mut files = Vec::new();
    rust_files(&root, &mut files);
    let mut wrong = Vec::new();
    for f in &files {
        let rel = f
            .strip_prefix(&root)
            .unwrap()
            .to_string_lossy()
            .into_owned();
        let top = rel.split('/').next().unwrap().trim_end_matches(".rs");
        if top == "lib" || top == "main" {
            continue;
        }
        let place = stages.iter().position(|s| s == top);
        assert!(
            place.is_some() || cross.iter().any(|c| c == top),
            "pipeline/{rel}: module `{top}` is neither a stage nor cross-cutting in lib.rs's list"
        );
        let text = std::fs::read_to_string(f).unwrap();
        for m in imports(&text) {
            if m == top {
                continue;
            }
            let allowed = match (place, stages.iter().position(|s| *s == m)) {
                // A stage: earlier stages and the cross-cutting modules.
                (Some(at), Some(other)) => other < at,
                (Some(_), None) => cross.contains(&m),
                // A cross-cutting module: only the others.
                (None, _) => cross.contains(&m),
            };
            if !allowed {
                wrong.push(format!("pipeline/{rel} imports `{m}`"));
            }
        }
    }
    assert!(
        wrong.is_empty(),
        "imports against the flow:\n{}",
        wrong.join("\n")
    );
}

/// The check itself reads imports as written: a test that it sees what it must.
#[test]
fn imports_are_read_from_paths_and_groups() {
    let text = "use crate::config::Config;\nuse crate::{error::Result, risk};\n// crate::pack in a comment\nfn f() { crate::models::solve_all(); }\n#[cfg(test)]\nmod tests {\n    use crate::signoff;\n}\n";
    assert_eq!(imports(text), ["config", "error", "risk", "models"]);
}
