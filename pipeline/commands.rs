//! One function per subcommand, each taking parsed arguments and returning what to print.
//!
//! Progress goes to stderr through [`Progress`] (silenced by `--quiet`); results go to stdout; errors are
//! returned to the binary, which prints them once with their causes.

use crate::config::Overrides;
use crate::error::Result;
use crate::run;
use crate::timings;
use std::path::{Path, PathBuf};
use std::time::Duration;

mod previous;
pub mod sweep;

/// A spinner on stderr for steps that may take over a second; does nothing when quiet.
pub struct Progress {
    bar: Option<indicatif::ProgressBar>,
}

impl Progress {
    /// A progress line on stderr, hidden when `quiet` or when stderr is not a terminal.
    pub fn new(quiet: bool) -> Self {
        if quiet {
            return Progress { bar: None };
        }
        let bar = indicatif::ProgressBar::new_spinner();
        bar.enable_steady_tick(Duration::from_millis(120));
        Progress { bar: Some(bar) }
    }

    /// Shows the current step.
    pub fn step(&self, msg: &str) {
        if let Some(b) = &self.bar {
            b.set_message(msg.to_string());
        }
    }

    /// Clears the line.
    pub fn finish(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

/// The command line's settings of `tailpack run`.
#[derive(Debug, Clone)]
pub struct RunOptions {
    /// Settings that replace the config's, applied when it is loaded.
    pub overrides: Overrides,
    /// How long to wait for another run's archive lock.
    pub lock_timeout: Duration,
    /// No progress line on stderr.
    pub quiet: bool,
    /// Also measure the wall time of each stage and the peak memory.
    pub timings: bool,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            overrides: Overrides::default(),
            lock_timeout: crate::archive::LOCK_TIMEOUT,
            quiet: true,
            timings: false,
        }
    }
}

/// What `tailpack run` gives back: the outcome, and the timing table when asked for, also after a failure.
pub struct Ran {
    pub outcome: Result<RunReport>,
    /// The stage timings table for stderr (`--timings`).
    pub timings: Option<String>,
}

/// `tailpack run` as the binary calls it: [`run`] with its progress line, timed when asked.
pub fn run_timed(config: &Path, opts: &RunOptions) -> Ran {
    let start = std::time::Instant::now();
    let outcome = run(config, opts, &Progress::new(opts.quiet));
    Ran {
        outcome,
        timings: opts.timings.then(|| timings(start.elapsed())),
    }
}

/// What `tailpack run` did.
pub struct RunReport {
    /// Text for stdout; its last line is the pack folder.
    pub text: String,
    /// The documented exit code (0, or 4 after a solver error, or 5 when nothing was to do).
    pub code: i32,
}

/// `tailpack run`: builds the pack as the next revision, or does nothing when a pack with identical
/// inputs exists. A multi-fund config builds one pack per fund in parallel; a failing fund does not stop
/// the others, and the worst outcome sets the exit code.
pub fn run(config: &Path, opts: &RunOptions, progress: &Progress) -> Result<RunReport> {
    progress.step("reading config and data");
    let mut funds = crate::config::load_all(config, &opts.overrides)?;
    let root = output_root(config, &funds[0], &opts.overrides)?;
    let _lock = crate::archive::lock(&root, opts.lock_timeout)?;
    if funds.len() == 1 {
        return run_fund(funds.remove(0), progress);
    }
    progress.step(&format!("building {} fund packs in parallel", funds.len()));
    use rayon::prelude::*;
    let quiet = Progress::new(true);
    let outcomes: Vec<(String, Result<RunReport>)> = funds
        .into_par_iter()
        .map(|cfg| (cfg.short_name.clone(), run_fund(cfg, &quiet)))
        .collect();
    crate::signoff::write_index(&root)?;
    progress.finish();
    Ok(multi_summary(&outcomes))
}

/// The pack root of a run (`--out`, else `output.root`, as the config resolved it), refused when it is or lies inside a pack folder
/// (the archive's lock and index written there would change a pack that verifies only as written) or when
/// a file stands where it or one of its folders must be created.
fn output_root(
    config: &Path,
    cfg: &crate::config::Config,
    overrides: &Overrides,
) -> Result<PathBuf> {
    let root = cfg.out_root.clone();
    let key = match &overrides.out {
        Some(_) => "--out",
        None => "output.root",
    };
    match enclosing_pack(&root) {
        Some(pack) => Err(crate::error::Error::config(
            config,
            format!(
                "{key} {}: is inside the pack {} (a folder with {} or {}); a pack must stay as it was written, so choose an output root outside every pack",
                root.display(),
                pack.display(),
                crate::archive::MANIFEST,
                crate::archive::LISTING
            ),
        )),
        None => {
            crate::error::fs::creatable_folder(&root)?;
            Ok(root)
        }
    }
}

/// The pack folder `dir` is or lies in, if any: the nearest part of `dir` that exists, with symbolic
/// links resolved, and every folder above it are looked at.
fn enclosing_pack(dir: &Path) -> Option<PathBuf> {
    let existing = dir.ancestors().find_map(|a| {
        let a = if a.as_os_str().is_empty() {
            Path::new(".")
        } else {
            a
        };
        std::fs::canonicalize(a).ok()
    })?;
    existing
        .ancestors()
        .find(|a| {
            a.join(crate::archive::MANIFEST).is_file() || a.join(crate::archive::LISTING).is_file()
        })
        .map(Path::to_path_buf)
}

/// One fund: plan, no-op check, compute, write (the caller holds the archive lock).
fn run_fund(cfg: crate::config::Config, progress: &Progress) -> Result<RunReport> {
    let prepared = run::prepare_fund(cfg)?;
    let plan = timings::time("hashing", || {
        crate::archive::plan(&prepared.cfg, prepared.data.as_of)
    })?;
    if let Some(existing) = crate::archive::identical(&plan) {
        progress.finish();
        let shown = std::fs::canonicalize(&existing).unwrap_or(existing);
        let text = format!(
            "nothing to do: a pack with identical inputs exists (pack id {})\n{}\n",
            plan.pack_id,
            shown.display()
        );
        return Ok(RunReport {
            text,
            code: crate::error::EXIT_NOTHING_TO_DO,
        });
    }
    progress.step("solving the CVaR models, frontier, stress set and backtest");
    let seed = crate::analysis::bands::seed_of(&plan.pack_id);
    let past = previous::find(
        &prepared.cfg.out_root,
        &prepared.cfg.short_name,
        prepared.data.as_of,
    );
    let result = run::solve_after(prepared, seed, past)?;
    progress.step("writing the pack");
    let (dir, text) = crate::pack::write(&result, &plan)?;
    timings::time("writing", || {
        crate::signoff::write_index(&result.config.out_root)
    })?;
    progress.finish();
    let failed = result
        .models
        .iter()
        .any(|m| m.outcome.status == crate::models::Status::SolverError);
    let code = if failed {
        crate::error::EXIT_SOLVER
    } else {
        crate::error::EXIT_OK
    };
    Ok(RunReport {
        text: format!("{text}{}\n", dir.display()),
        code,
    })
}

/// The end-of-run summary of a multi-fund run: one line per fund; the exit code is the most severe
/// outcome (errors first, then solver failures, then success; all-unchanged gives "nothing to do").
fn multi_summary(outcomes: &[(String, Result<RunReport>)]) -> RunReport {
    let mut text = String::new();
    let mut codes = Vec::new();
    for (name, o) in outcomes {
        match o {
            Ok(r) => {
                text.push_str(&format!(
                    "{name}: {} {}\n",
                    if r.code == crate::error::EXIT_NOTHING_TO_DO {
                        "unchanged"
                    } else if r.code == 0 {
                        "ok"
                    } else {
                        "solver failure"
                    },
                    r.text.lines().last().unwrap_or("")
                ));
                codes.push(r.code);
            }
            Err(e) => {
                text.push_str(&format!(
                    "{name}: FAILED: {}\n",
                    e.to_string().replace('\n', " ")
                ));
                codes.push(e.exit_code());
            }
        }
    }
    let rank = |c: i32| match c {
        0 => 0,
        5 => -1,
        4 => 1,
        _ => 2,
    };
    let code = if codes.iter().all(|c| *c == crate::error::EXIT_NOTHING_TO_DO) {
        crate::error::EXIT_NOTHING_TO_DO
    } else {
        codes
            .iter()
            .copied()
            .filter(|c| *c != crate::error::EXIT_NOTHING_TO_DO)
            .max_by_key(|c| (rank(*c), *c))
            .unwrap_or(0)
    };
    let failed = codes.iter().filter(|c| !matches!(**c, 0 | 5)).count();
    text.push_str(&format!(
        "{} funds: {} ok or unchanged, {failed} with problems\n",
        outcomes.len(),
        outcomes.len() - failed
    ));
    RunReport { text, code }
}

/// `tailpack verify`: recomputes every digest, accounts for every file, checks every signature and the
/// signed finalisation; with `rerun`, also re-runs from the archived inputs and compares every output byte
/// for byte.
pub fn verify(pack: &Path, rerun: bool) -> Result<String> {
    let mut problems: Vec<String> = crate::signoff::check_pack(pack)?
        .into_iter()
        .map(|f| format!("{}: {}", f.file, f.problem))
        .collect();
    if problems.is_empty() && rerun {
        problems.extend(rerun_differences(pack)?);
    }
    if !problems.is_empty() {
        return Err(crate::error::Error::Verify {
            pack: pack.to_path_buf(),
            problems,
        });
    }
    let id = crate::archive::recorded_id(pack).unwrap_or_default();
    let rec = crate::signoff::record(pack).unwrap_or_default();
    let signed = match (&rec.finalised, rec.signatures.len()) {
        (Some(_), n) => format!("; final, {n} signature(s) and the finalisation hold"),
        (None, 0) => "; not signed".to_string(),
        (None, n) => format!("; {n} signature(s) hold, not final"),
    };
    let how = if rerun {
        "every digest matches and a re-run from the archived inputs gives identical outputs"
    } else {
        "every digest matches"
    };
    Ok(format!(
        "pack {} verified: {how}{signed} (pack id {id})\n",
        pack.display()
    ))
}

/// Recomputes a pack's run from its archived inputs alone.
fn recompute(pack: &Path, scratch: &Path) -> Result<(run::RunResult, crate::archive::Plan)> {
    let overrides = crate::config::Overrides {
        out: Some(scratch.to_path_buf()),
        ..Default::default()
    };
    let cfg = crate::config::load_archived(&pack.join("inputs"), &overrides)?;
    let data = crate::ingest::load(&cfg)?;
    let plan = crate::archive::plan(&cfg, data.as_of)?;
    let seed = crate::analysis::bands::seed_of(&plan.pack_id);
    let past = previous::recorded(pack, &cfg.short_name);
    Ok((run::compute_after(cfg, data, seed, past)?, plan))
}

/// `tailpack finalize PACK --role R --key K`: once every required role has signed, renders
/// `pack-final.pdf` (status FINAL, sign-off page filled) and seals it with a finalisation statement signed
/// by a required role's key; the pack is immutable from then on.
pub fn finalize(pack: &Path, role: &str, key: &Path, name: Option<&str>) -> Result<Signed> {
    let _lock = crate::archive::lock_pack(pack, crate::archive::LOCK_TIMEOUT)?;
    let fin = crate::signoff::prepare_final(pack, role, key, name)?;
    let scratch = std::env::temp_dir().join(format!("tailpack-final-{}", std::process::id()));
    let (result, plan) = recompute(pack, &scratch)?;
    let mut results: serde_json::Value =
        serde_json::from_slice(&crate::error::fs::read(&pack.join("results.json"))?)
            .unwrap_or_default();
    results["signoff"] = final_block(&fin.record, &fin.roles);
    let pdf = crate::report::render(&result, &results, &plan.pack_id)?;
    let warnings = fin.warnings.clone();
    let rec = crate::signoff::seal_final(pack, fin, &pdf, chrono::Utc::now())?;
    let name = crate::archive::FINAL_PDF;
    let tmp = pack.join(format!(".{name}.{}.tmp", std::process::id()));
    crate::error::fs::write(&tmp, &pdf)?;
    crate::error::fs::rename(&tmp, &pack.join(name))?;
    crate::signoff::save(pack, &rec)?;
    crate::signoff::rebag(pack, &rec)?;
    if let Some(root) = crate::archive::root_of(pack) {
        crate::signoff::write_index(root)?;
    }
    Ok(Signed {
        text: format!(
            "finalised {}: {name} written and sealed by `{role}`; the pack is now immutable\n",
            pack.display()
        ),
        warnings,
    })
}

/// The sign-off facts the final PDF prints: status FINAL and one row per role.
fn final_block(
    rec: &crate::signoff::Record,
    roles: &[crate::config::SignRole],
) -> serde_json::Value {
    let st = crate::signoff::statements(rec);
    let rows: Vec<serde_json::Value> = roles.iter().map(|r| {
        let s = st.iter().find(|s| s.role == r.role);
        serde_json::json!({"role": r.role, "title": r.title.clone().unwrap_or_else(|| r.role.clone()),
            "name": s.map(|s| s.name.clone()), "signed_at": s.map(|s| s.signed_at.clone()),
            "fingerprint": s.map(|s| crate::signoff::fingerprint(&s.public_key))})
    }).collect();
    serde_json::json!({"status": "FINAL", "roles": rows})
}

fn rerun_differences(pack: &Path) -> Result<Vec<String>> {
    let scratch = std::env::temp_dir().join(format!("tailpack-rerun-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&scratch);
    let (result, plan) = recompute(pack, &scratch)?;
    crate::error::fs::create_dir_all(&scratch)?;
    crate::pack::fill(&result, &scratch, &plan)?;
    let mut out = Vec::new();
    if Some(plan.pack_id.as_str()) != crate::archive::recorded_id(pack).as_deref() {
        out.push(format!(
            "{}: the re-run's inputs give pack id {}, not the recorded one",
            crate::archive::LISTING,
            plan.pack_id
        ));
    }
    for name in [
        "results.json",
        "scenarios.csv",
        "reference-scenarios.csv",
        "weights.csv",
        "summary.txt",
        "pack.pdf",
    ] {
        let (a, b) = (
            std::fs::read(pack.join(name)).ok(),
            std::fs::read(scratch.join(name)).ok(),
        );
        if a != b {
            out.push(format!(
                "{name}: the re-run from the archived inputs gives different bytes"
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&scratch);
    Ok(out)
}

/// `tailpack keygen PREFIX`: writes an Ed25519 key pair.
pub fn keygen(prefix: &Path) -> Result<String> {
    crate::signoff::keygen(prefix)
}

/// What `sign` or `finalize` did: text for stdout, warnings for stderr.
pub struct Signed {
    pub text: String,
    pub warnings: Vec<String>,
}

/// `tailpack sign PACK --role R --key KEYFILE [--name N]`, under the pack's lock so concurrent signers
/// never lose a statement.
pub fn sign(pack: &Path, role: &str, key: &Path, name: Option<&str>) -> Result<Signed> {
    let _lock = crate::archive::lock_pack(pack, crate::archive::LOCK_TIMEOUT)?;
    let done = crate::signoff::sign(pack, role, key, name, chrono::Utc::now())?;
    if let Some(root) = crate::archive::root_of(pack) {
        crate::signoff::write_index(root)?;
    }
    Ok(Signed {
        text: done.text,
        warnings: done.warnings,
    })
}

/// `tailpack check`: every check `run` makes before its first LP, through the same steps (config and
/// stress file, output root, data and its quality, scenarios, feasible set, stress shocks against the
/// data, the custom template folder), so it refuses what `run` refuses with the same exit code; returns
/// the data-quality report.
pub fn check(config: &Path, overrides: &Overrides) -> Result<String> {
    let funds = crate::config::load_all(config, overrides)?;
    output_root(config, &funds[0], overrides)?;
    let mut out = String::new();
    for cfg in funds {
        out.push_str(&check_fund(cfg)?);
    }
    Ok(out)
}

fn check_fund(cfg: crate::config::Config) -> Result<String> {
    let prepared = run::prepare_fund(cfg)?;
    let (cfg, data) = (&prepared.cfg, &prepared.data);
    // `run` reads the template folder when it plans the pack, before its first LP.
    crate::report::templates::custom(cfg)?;
    let q = &data.quality;
    if cfg.prices.is_none() {
        return Ok(format!(
            "fund {}: config {} is valid\nno price file; as-of {}; {} scenarios of {} assets from the scenario file {}\nfeasible set: {} assets, {} group limit(s) resolved\n",
            cfg.short_name,
            cfg.path.display(),
            data.as_of,
            prepared.scenarios.len(),
            data.assets.len(),
            cfg.scenario_name.as_deref().unwrap_or(""),
            data.assets.len(),
            prepared.feasible.groups.len()
        ));
    }
    let mut out = format!(
        "fund {}: config {} is valid\nprices {} ({} layout): {} to {}; as-of {}; scenario window {} to {} ({} observations)\nfill policy: {}\n",
        cfg.short_name,
        cfg.path.display(),
        cfg.price_file().display(),
        data.layout.word(),
        data.history.0,
        data.history.1,
        data.as_of,
        q.window_start,
        q.window_end,
        q.observations,
        q.fill_policy
    );
    out.push_str(&format!(
        "{:<14} {:>8} {:>7} {:>12} {:>12} {:>8} {}\n",
        "asset", "missing", "filled", "longest gap", "stale run", "extreme", "status"
    ));
    for a in &q.assets {
        let status = if a.dropped { "dropped" } else { "kept" };
        out.push_str(&format!(
            "{:<14} {:>8} {:>7} {:>12} {:>12} {:>8} {status}\n",
            a.asset, a.missing, a.filled, a.longest_gap, a.longest_stale_run, a.extreme_moves
        ));
    }
    for f in &q.findings {
        out.push_str(&format!("{}: {}\n", f.level.word(), f.message));
    }
    out.push_str(&format!(
        "feasible set: {} assets, {} group limit(s) resolved; {} scenarios; stress file: {}\n",
        data.assets.len(),
        prepared.feasible.groups.len(),
        prepared.scenarios.len(),
        match &cfg.stress_file {
            Some(p) => format!(
                "{} shock(s) resolved ({})",
                prepared.shocks.len(),
                p.display()
            ),
            None => "none".into(),
        }
    ));
    Ok(out)
}

/// `tailpack demo-data DIR`: regenerates the invented demo data files.
pub fn demo_data(dir: &PathBuf) -> Result<String> {
    let s = crate::demo::write_demo_data(dir).map_err(|source| crate::error::Error::Io {
        action: "cannot write demo data to",
        path: dir.clone(),
        source,
    })?;
    Ok(format!(
        "wrote synthetic demo data for {} assets, {} business days ({} to {}) to {}\n",
        s.assets,
        s.days,
        s.first,
        s.last,
        dir.display()
    ))
}

/// The stage table of `tailpack run --timings`.
pub fn timings(wall: Duration) -> String {
    timings::table(&timings::take(), wall, timings::peak_memory())
}

/// `tailpack bench`: prints the table as it goes; returns nothing more to print.
pub fn bench(opts: &crate::bench::BenchOptions) -> Result<String> {
    crate::bench::run(opts, &mut std::io::stdout())?;
    Ok(String::new())
}

/// `demo-scenarios`: an invented simulated scenario file of `assets` × `scenarios` with its asset and
/// holdings files ([`crate::demo_scenarios`]).
pub fn demo_scenarios(dir: &std::path::Path, assets: usize, scenarios: usize) -> Result<String> {
    let w = crate::demo_scenarios::write(dir, assets, scenarios)?;
    Ok(format!(
        "wrote an invented simulated scenario file of {} scenarios × {} assets (scenarios.csv, assets.csv, holdings.csv) to {}\n",
        w.scenarios,
        w.assets,
        dir.display()
    ))
}
