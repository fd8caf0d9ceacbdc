//! `tailpack verify <archive root>`: the fixity sweep of a whole archive. Every pack folder under the
//! root (`<fund>/<as-of>/r<N>`, and every pack the index lists) gets every check `verify` makes on one pack
//! ([`crate::signoff::check_pack`]: digests, listings, the bag, signatures, finalisation, its index row),
//! in parallel; the index files are compared with the index the packs make now. The result is a summary
//! table for the terminal, a JSON report for machines (`--report FILE`) and exit 7 when anything failed.
//!
//! Reads the archive only; writes nothing but the report file.

use crate::archive::{self, MANIFEST};
use crate::error::{EXIT_OK, EXIT_VERIFY, Result, fs};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// The command line's settings of a sweep.
#[derive(Debug, Clone, Default)]
pub struct SweepOptions {
    /// Also re-run every intact pack from its archived inputs (one after another).
    pub rerun: bool,
    /// Where to write the JSON report.
    pub report: Option<PathBuf>,
    /// No progress bar.
    pub quiet: bool,
}

/// What a sweep gives back: the table for stdout and the exit code (0, or 7 when anything failed).
pub struct Swept {
    pub text: String,
    pub code: i32,
    /// The machine-readable report (also written to `--report`).
    pub report: Report,
}

/// The machine-readable report of a sweep (`--report FILE`).
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// Version of this report's layout.
    pub report_version: u32,
    /// The archive root as given on the command line.
    pub root: String,
    /// Whether each intact pack was also re-run from its archived inputs.
    pub rerun: bool,
    pub summary: Summary,
    /// Every pack, in index order (fund, as-of, revision).
    pub packs: Vec<PackResult>,
    /// Problems of the archive's index files (empty when they match the packs).
    pub index: Vec<Problem>,
    /// Remarks that fail nothing (e.g. an index page not yet written by this version).
    pub notes: Vec<String>,
}

/// The counts of the summary table.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Summary {
    pub packs_checked: usize,
    pub intact: usize,
    pub failed: usize,
    /// Packs without any signature (status `draft`).
    pub unsigned: usize,
    /// Packs whose sign-off record marks them final.
    pub r#final: usize,
    /// Whether the index files match the packs.
    pub index_intact: bool,
}

/// One pack's outcome.
#[derive(Debug, Clone, Serialize)]
pub struct PackResult {
    /// The pack folder relative to the archive root.
    pub path: String,
    /// The pack id its manifest records (absent when the manifest cannot be read).
    pub pack_id: Option<String>,
    /// `draft`, `signing` or `final`, as its sign-off record says.
    pub status: &'static str,
    /// Whether the pack is a BagIt bag (packs written before packs were bags are not).
    pub bag: bool,
    pub intact: bool,
    pub problems: Vec<Problem>,
}

/// One problem, naming the file.
#[derive(Debug, Clone, Serialize)]
pub struct Problem {
    pub file: String,
    pub problem: String,
}

/// Whether `path` is an archive root rather than a pack: it holds no manifest but the index or the
/// archive lock a run leaves there.
pub fn is_archive_root(path: &Path) -> bool {
    !path.join(MANIFEST).exists()
        && (archive::INDEX_FILES.iter().any(|f| path.join(f).exists())
            || path.join(".tailpack.lock").exists())
}

/// Sweeps the archive at `root`.
pub fn sweep(root: &Path, opts: &SweepOptions) -> Result<Swept> {
    let packs = pack_folders(root);
    let bar = progress(packs.len() as u64, opts.quiet);
    use rayon::prelude::*;
    let mut results: Vec<PackResult> = packs
        .par_iter()
        .map(|p| {
            let r = check(root, p);
            bar.inc(1);
            r
        })
        .collect();
    if opts.rerun {
        for (r, p) in results.iter_mut().zip(&packs).filter(|(r, _)| r.intact) {
            bar.set_message(format!("re-running {}", r.path));
            rerun(r, p);
        }
    }
    bar.finish_and_clear();
    let (index, notes) = index_problems(root, &packs);
    let summary = summarise(&results, index.is_empty());
    let report = Report {
        report_version: 1,
        root: root.display().to_string(),
        rerun: opts.rerun,
        summary,
        packs: results,
        index,
        notes,
    };
    if let Some(path) = &opts.report {
        fs::write(
            path,
            serde_json::to_string_pretty(&report).expect("json") + "\n",
        )?;
    }
    let failed = report.summary.failed > 0 || !report.summary.index_intact;
    Ok(Swept {
        text: table(&report),
        code: if failed { EXIT_VERIFY } else { EXIT_OK },
        report,
    })
}

/// Every `<fund>/<as-of>/r<N>` folder under the root (with or without a manifest, so a pack whose
/// manifest was removed is still checked) and every folder the index lists, in index order.
fn pack_folders(root: &Path) -> Vec<PathBuf> {
    let mut out: Vec<PathBuf> = Vec::new();
    for fund in visible_dirs(root) {
        for as_of in visible_dirs(&fund) {
            out.extend(visible_dirs(&as_of).into_iter().filter(|p| {
                p.file_name()
                    .and_then(|n| n.to_str())
                    .and_then(|n| n.strip_prefix('r'))
                    .is_some_and(|n| !n.is_empty() && n.bytes().all(|b| b.is_ascii_digit()))
            }));
        }
    }
    for listed in listed_paths(root) {
        let p = root.join(&listed);
        if !out.contains(&p) {
            out.push(p);
        }
    }
    out.sort_by_key(|p| order_key(root, p));
    out
}

/// Sorts packs by fund, as-of and revision number (r10 after r9).
fn order_key(root: &Path, p: &Path) -> (String, String, u64) {
    let rel = p
        .strip_prefix(root)
        .unwrap_or(p)
        .to_string_lossy()
        .replace('\\', "/");
    let mut parts = rel.splitn(3, '/');
    let (f, a, r) = (parts.next(), parts.next(), parts.next());
    let n = r
        .and_then(|r| r.strip_prefix('r'))
        .and_then(|r| r.parse().ok())
        .unwrap_or(u64::MAX);
    (f.unwrap_or("").into(), a.unwrap_or("").into(), n)
}

fn visible_dirs(dir: &Path) -> Vec<PathBuf> {
    let Ok(rd) = std::fs::read_dir(dir) else {
        return vec![];
    };
    let mut v: Vec<PathBuf> = rd
        .filter_map(|e| e.ok())
        .filter(|e| !e.file_name().to_string_lossy().starts_with('.'))
        .map(|e| e.path())
        .filter(|p| p.is_dir())
        .collect();
    v.sort();
    v
}

/// The pack paths `index.json` lists (relative to the root); none when it is missing or unreadable.
fn listed_paths(root: &Path) -> Vec<String> {
    let rows: Vec<serde_json::Value> = std::fs::read(root.join("index.json"))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok())
        .unwrap_or_default();
    rows.iter()
        .filter_map(|r| r["path"].as_str())
        .filter(|p| archive_path(p))
        .map(str::to_string)
        .collect()
}

/// A path of three plain parts below the root (an index row cannot send the sweep elsewhere).
fn archive_path(p: &str) -> bool {
    let parts: Vec<&str> = p.split('/').collect();
    parts.len() == 3
        && parts
            .iter()
            .all(|c| !c.is_empty() && *c != "." && *c != ".." && !c.contains('\\'))
}

/// Every check of one pack.
fn check(root: &Path, pack: &Path) -> PackResult {
    let problems: Vec<Problem> = match crate::signoff::check_pack(pack) {
        Ok(found) => found
            .into_iter()
            .map(|f| Problem {
                file: f.file,
                problem: f.problem,
            })
            .collect(),
        Err(e) => vec![Problem {
            file: MANIFEST.into(),
            problem: format!("cannot be checked: {}", e.to_string().replace('\n', " ")),
        }],
    };
    PackResult {
        path: relative(root, pack),
        pack_id: archive::recorded_id(pack),
        status: crate::signoff::index_entry(pack).status,
        bag: archive::bag::is_bag(pack),
        intact: problems.is_empty(),
        problems,
    }
}

/// Re-runs an intact pack from its archived inputs; differences become its problems.
fn rerun(r: &mut PackResult, pack: &Path) {
    let found = match super::rerun_differences(pack) {
        Ok(d) => d,
        Err(e) => vec![format!(
            "the re-run failed: {}",
            e.to_string().replace('\n', " ")
        )],
    };
    for d in found {
        let (file, problem) = d.split_once(": ").unwrap_or(("-", &d));
        r.problems.push(Problem {
            file: file.into(),
            problem: problem.into(),
        });
    }
    r.intact = r.problems.is_empty();
}

fn relative(root: &Path, pack: &Path) -> String {
    pack.strip_prefix(root)
        .unwrap_or(pack)
        .to_string_lossy()
        .replace('\\', "/")
}

/// The index files against the index the packs make now, and index rows naming no pack folder. A missing
/// `index.html` (an archive last written before the page existed) is a note, not a failure.
fn index_problems(root: &Path, packs: &[PathBuf]) -> (Vec<Problem>, Vec<String>) {
    let mut problems = Vec::new();
    let mut notes = Vec::new();
    let made = match archive::index_files(root, &crate::signoff::index_entry) {
        Ok(m) => m,
        Err(e) => {
            let problem = format!("cannot be rebuilt to compare: {e}");
            return (
                vec![Problem {
                    file: "index.json".into(),
                    problem,
                }],
                notes,
            );
        }
    };
    for (name, bytes) in made {
        match std::fs::read(root.join(name)) {
            Ok(on_disk) if on_disk == bytes => {}
            Ok(_) => problems.push(Problem {
                file: name.into(),
                problem: "differs from the index the packs make now (altered, or a pack changed after it was written)".into(),
            }),
            Err(_) if name == "index.html" => notes.push(format!(
                "{name} is missing: the next run, sign or finalize on this archive writes it"
            )),
            Err(_) => problems.push(Problem {
                file: name.into(),
                problem: "is missing".into(),
            }),
        }
    }
    for listed in listed_paths(root) {
        if !packs.contains(&root.join(&listed)) || !root.join(&listed).is_dir() {
            problems.push(Problem {
                file: "index.json".into(),
                problem: format!("lists the pack {listed}, which is not in the archive"),
            });
        }
    }
    (problems, notes)
}

fn summarise(packs: &[PackResult], index_intact: bool) -> Summary {
    let count = |f: &dyn Fn(&PackResult) -> bool| packs.iter().filter(|p| f(p)).count();
    Summary {
        packs_checked: packs.len(),
        intact: count(&|p| p.intact),
        failed: count(&|p| !p.intact),
        unsigned: count(&|p| p.status == "draft"),
        r#final: count(&|p| p.status == "final"),
        index_intact,
    }
}

/// The terminal's view: one line per pack, the problems of each failed pack and of the index, then the
/// summary table.
fn table(r: &Report) -> String {
    let width = r
        .packs
        .iter()
        .map(|p| p.path.chars().count())
        .max()
        .unwrap_or(4)
        .max(4);
    let mut s = format!(
        "{:<width$}  {:<7}  {:<3}  result\n",
        "pack", "status", "bag"
    );
    for p in &r.packs {
        let result = if p.intact { "intact" } else { "FAILED" };
        let bag = if p.bag { "yes" } else { "no" };
        s.push_str(&format!(
            "{:<width$}  {:<7}  {bag:<3}  {result}\n",
            p.path, p.status
        ));
        for f in &p.problems {
            s.push_str(&format!("    {}: {}\n", f.file, f.problem));
        }
    }
    for f in &r.index {
        s.push_str(&format!("index FAILED: {}: {}\n", f.file, f.problem));
    }
    for n in &r.notes {
        s.push_str(&format!("note: {n}\n"));
    }
    let m = &r.summary;
    s.push_str(&format!(
        "\npacks checked  intact  failed  unsigned  final  index\n{:>13}  {:>6}  {:>6}  {:>8}  {:>5}  {}\n",
        m.packs_checked,
        m.intact,
        m.failed,
        m.unsigned,
        m.r#final,
        if m.index_intact { "intact" } else { "FAILED" }
    ));
    s
}

/// A bar on stderr, only when stderr is a terminal and not `quiet`.
fn progress(len: u64, quiet: bool) -> indicatif::ProgressBar {
    use std::io::IsTerminal as _;
    if quiet || !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let bar = indicatif::ProgressBar::new(len);
    if let Ok(style) =
        indicatif::ProgressStyle::with_template("verifying {bar:32} {pos}/{len} packs {msg}")
    {
        bar.set_style(style);
    }
    bar
}
