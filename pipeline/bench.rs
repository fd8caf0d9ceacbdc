//! `tailpack bench`: the three CVaR models on synthetic problems of chosen sizes, model building and
//! solving timed separately (median of several runs); optionally the identical problems solved by an
//! external reference script in the same run, with the time ratio and the objective difference; and the
//! demo pack end to end with its stage timings and peak memory. It prints figures; nothing here is a test.
//!
//! The synthetic problems are invented and deterministic (seeded): fat-tailed one- and two-factor returns,
//! bounds, four group caps and a turnover limit around equal weights — every kind of row a fund's
//! feasible set has. The CVaR cap is the equal-weight portfolio's CVaR and the return floor its expected
//! return, so all three models are feasible by construction and need no auxiliary LP.

use crate::config::{Backend, CapRule, FloorRule};
use crate::error::{Error, Result};
use crate::models::lp;
use crate::models::{
    self, Family, FamilyOutcome, FeasibleSet, Group, Method, Premises, Problem, Solution, Status,
    Targets,
};
use crate::random::Rng;
use crate::risk;
use crate::scenarios::ScenarioSet;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

/// The default sizes (assets N, scenarios S).
pub const DEFAULT_SIZES: [(usize, usize); 7] = [
    (40, 200),
    (440, 200),
    (100, 2_500),
    (500, 5_000),
    (500, 20_000),
    (1_000, 50_000),
    (2_000, 100_000),
];

/// Above [`DIRECT_UP_TO_CELLS`] cells N·S the bench neither times the direct LP (as the other method) nor
/// runs the reference, which also solves it, unless told to (`--direct-at-scale`, each stopped at the
/// time limit): at 2,000 × 100,000 its rows alone hold 2·10^8 nonzeros
/// (about 2.4 GB in tailpack's row store, copied again by the highs crate and by HiGHS, the reference's
/// in numpy/scipy likewise), and at 1,000 × 50,000 neither finished within 300 s (README, "Performance").
pub use crate::models::DIRECT_UP_TO_CELLS;

/// After a run this long, further runs of the same LP are skipped (the median is then of fewer runs).
const LONG_RUN: Duration = Duration::from_secs(20);

/// An external solver to run on the same problems.
#[derive(Debug, Clone)]
pub struct Reference {
    /// The interpreter, e.g. `python3`.
    pub program: String,
    /// The script, e.g. `tests/reference/bench_reference.py`.
    pub script: PathBuf,
}

/// What `tailpack bench` does.
#[derive(Debug, Clone)]
pub struct BenchOptions {
    pub sizes: Vec<(usize, usize)>,
    /// Runs per LP (the median is reported).
    pub runs: usize,
    pub reference: Option<Reference>,
    /// Also time the method tailpack does not choose at each size (direct LP or cutting planes).
    pub other_too: bool,
    /// Wall-clock limit per LP run for the other method and the reference, in seconds.
    pub time_limit: f64,
    /// Run the direct LP and the reference above [`DIRECT_UP_TO_CELLS`] too (with the time limit).
    pub direct_at_scale: bool,
    /// A config to build end to end, with stage timings.
    pub demo: Option<PathBuf>,
    /// Scratch folder for problem files and the demo pack.
    pub work: PathBuf,
}

impl Default for BenchOptions {
    fn default() -> Self {
        BenchOptions {
            sizes: DEFAULT_SIZES.to_vec(),
            runs: 3,
            reference: None,
            other_too: true,
            time_limit: 900.0,
            direct_at_scale: false,
            demo: None,
            work: PathBuf::from("out/bench"),
        }
    }
}

/// A size as the command line writes it: `440x200` → (440 assets, 200 scenarios); both at least 1.
pub fn parse_size(s: &str) -> std::result::Result<(usize, usize), String> {
    let bad = || format!("`{s}` is not ASSETSxSCENARIOS (e.g. 500x5000) with both at least 1");
    let (a, b) = s.trim().split_once(['x', 'X']).ok_or_else(bad)?;
    let n: usize = a.trim().parse().map_err(|_| bad())?;
    let k: usize = b.trim().parse().map_err(|_| bad())?;
    if n == 0 || k == 0 {
        return Err(bad());
    }
    Ok((n, k))
}

/// A synthetic problem.
pub struct Synthetic {
    pub set: ScenarioSet,
    pub feasible: FeasibleSet,
    pub confidence: f64,
    pub cap: f64,
    pub floor: f64,
}

/// A deterministic synthetic problem with `n` assets and `s` equally likely scenarios.
pub fn synthetic(n: usize, s: usize, seed: u64) -> Synthetic {
    let mut rng = Rng::from_seed(seed ^ ((n as u64) << 32) ^ s as u64);
    let assets: Vec<(f64, f64, f64, f64)> = (0..n)
        .map(|_| {
            let drift = 0.002 + 0.008 * rng.uniform();
            let vol = 0.02 + 0.06 * rng.uniform();
            let b1 = 0.3 + 0.5 * rng.uniform();
            let b2 = 0.6 * rng.uniform() - 0.3;
            (drift, vol, b1, b2)
        })
        .collect();
    let mut returns = Vec::with_capacity(n * s);
    for _ in 0..s {
        let (f1, f2) = (rng.student_t4(), rng.student_t4());
        for &(drift, vol, b1, b2) in &assets {
            let own = (1.0 - b1 * b1 - b2 * b2).sqrt();
            returns.push(drift + vol * (b1 * f1 + b2 * f2 + own * rng.normal()));
        }
    }
    let names = (0..n).map(|i| format!("SYN{i:04}")).collect();
    let set = ScenarioSet::from_matrix(names, returns, vec![1.0 / s as f64; s])
        .expect("a well-formed synthetic matrix");
    let equal = vec![1.0 / n as f64; n];
    let groups = (0..4)
        .map(|g| Group {
            name: format!("group{g}"),
            members: (g..n).step_by(4).collect(),
            min: 0.0,
            max: 0.35,
        })
        .collect();
    let feasible = FeasibleSet {
        lower: vec![0.0; n],
        upper: vec![(4.0 / n as f64).min(1.0); n],
        groups,
        turnover_max: Some(0.8),
        current: Some(equal.clone()),
        cost_rates: vec![],
    };
    let confidence = 0.95;
    let cap = risk::cvar_of(&set, &equal, confidence);
    let floor = models::dot(&set.mean(), &equal);
    Synthetic {
        set,
        feasible,
        confidence,
        cap,
        floor,
    }
}

impl Synthetic {
    /// The problem's LPs on the HiGHS backend.
    pub fn problem(&self) -> Problem<'_> {
        Problem {
            set: &self.set,
            mu: self.set.mean(),
            confidence: self.confidence,
            feasible: &self.feasible,
            backend: Backend::Highs,
            active: None,
        }
    }

    /// The cap and floor as fixed values: no auxiliary LP is needed to resolve them.
    pub fn targets(&self) -> Targets<'static> {
        Targets {
            cap: CapRule::Value(self.cap),
            floor: FloorRule::Value(self.floor),
            current: None,
        }
    }
}

/// Medians of repeated runs of one LP.
#[derive(Debug, Clone)]
pub struct Measured {
    pub build: Duration,
    pub solve: Duration,
    pub runs: usize,
    /// Solver runs per solve (1 for the direct LP; cut rounds for cuts, for the ratio Dinkelbach's LP
    /// solves, each a cut round or a change of λ).
    pub rounds: usize,
    pub objective: Option<f64>,
    pub status: String,
}

impl Measured {
    /// Build plus solve.
    pub fn total(&self) -> Duration {
        self.build + self.solve
    }
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

/// Times every family with one method: `runs` rounds of [`models::solve_all_by`] on premises given by
/// construction (fewer rounds after one in which an LP ran longer than [`LONG_RUN`]).
pub fn measure(sy: &Synthetic, method: Method, runs: usize) -> Vec<(Family, Measured)> {
    let (p, targets) = (sy.problem(), sy.targets());
    let mut rounds = Vec::new();
    for _ in 0..runs.max(1) {
        let solution = models::solve_all_by(&p, &targets, Premises::Given, method);
        let long = solution
            .families
            .iter()
            .any(|f| spent(f).total() > LONG_RUN);
        rounds.push(solution);
        if long {
            break;
        }
    }
    Family::ALL
        .iter()
        .enumerate()
        .map(|(k, &family)| (family, medians(&rounds, k)))
        .collect()
}

/// A family's LP timing; a failed LP (e.g. one stopped by the time limit) reports none, so its wall time
/// counts as solve.
fn spent(f: &FamilyOutcome) -> lp::Timing {
    f.timing.unwrap_or(lp::Timing {
        solve: f.elapsed,
        ..lp::Timing::default()
    })
}

/// The medians of family `k` over the rounds, with the last round's objective, status and cut rounds.
fn medians(rounds: &[Solution], k: usize) -> Measured {
    let times: Vec<lp::Timing> = rounds.iter().map(|r| spent(&r.families[k])).collect();
    let last = &rounds.last().expect("at least one round").families[k];
    let o = &last.outcome;
    let status = match (&o.status, &o.message) {
        (Status::Optimal, _) => "optimal".to_string(),
        (s, Some(m)) => format!("{} ({m})", s.word()),
        (s, None) => s.word().to_string(),
    };
    Measured {
        runs: times.len(),
        build: median(times.iter().map(|t| t.build).collect()),
        solve: median(times.iter().map(|t| t.solve).collect()),
        rounds: last.timing.map_or(0, |t| t.runs),
        objective: o.objective.filter(|_| o.status == Status::Optimal),
        status,
    }
}

/// One model of the reference script's output.
#[derive(Debug, Clone)]
pub struct RefMeasured {
    pub build: Duration,
    pub solve: Duration,
    pub objective: Option<f64>,
    pub status: String,
}

/// Writes a problem for the reference script: `<stem>.f64` (the S×N return matrix, row-major,
/// little-endian IEEE doubles) and `<stem>.json` (everything else). Returns the JSON path.
pub fn write_problem(sy: &Synthetic, dir: &Path, runs: usize, time_limit: f64) -> Result<PathBuf> {
    let stem = format!("bench-{}x{}", sy.set.width(), sy.set.len());
    let matrix = dir.join(format!("{stem}.f64"));
    let bytes: Vec<u8> = sy
        .set
        .returns
        .iter()
        .flat_map(|v| v.to_le_bytes())
        .collect();
    crate::error::fs::write(&matrix, bytes)?;
    let fs = &sy.feasible;
    let doc = serde_json::json!({
        "assets": sy.set.width(),
        "scenarios": sy.set.len(),
        "returns_file": format!("{stem}.f64"),
        "probabilities": sy.set.probabilities,
        "confidence": sy.confidence,
        "lower": fs.lower,
        "upper": fs.upper,
        "groups": fs.groups.iter().map(|g| serde_json::json!({"members": g.members, "min": g.min, "max": g.max})).collect::<Vec<_>>(),
        "current": fs.current,
        "turnover_max": fs.turnover_max,
        "cvar_cap": sy.cap,
        "return_floor": sy.floor,
        "runs": runs,
        "time_limit": time_limit,
        "long_run_seconds": LONG_RUN.as_secs_f64(),
    });
    let path = dir.join(format!("{stem}.json"));
    crate::error::fs::write(&path, serde_json::to_vec_pretty(&doc).expect("json"))?;
    Ok(path)
}

/// Runs the reference script on a problem file; it prints one JSON object per model.
pub fn run_reference(r: &Reference, problem: &Path) -> Result<Vec<(String, RefMeasured)>> {
    let out = Command::new(&r.program)
        .arg(&r.script)
        .arg(problem)
        .output()
        .map_err(|source| Error::ReferenceMissing {
            program: r.program.clone(),
            script: r.script.clone(),
            source,
        })?;
    let failed = |message: String| Error::ReferenceFailed {
        script: r.script.clone(),
        message,
    };
    if !out.status.success() {
        return Err(failed(format!(
            "failed on {}: {}",
            problem.display(),
            String::from_utf8_lossy(&out.stderr).trim()
        )));
    }
    String::from_utf8_lossy(&out.stdout)
        .lines()
        .filter(|l| l.starts_with('{'))
        .map(|l| {
            serde_json::from_str(l)
                .map(|v| reference_line(&v))
                .map_err(|e| failed(format!("printed `{l}`, not a result line: {e}")))
        })
        .collect()
}

/// One model's result line of the reference script.
fn reference_line(v: &serde_json::Value) -> (String, RefMeasured) {
    let secs =
        |v: &serde_json::Value| Duration::from_secs_f64(v.as_f64().unwrap_or(f64::NAN).max(0.0));
    (
        v["model"].as_str().unwrap_or("?").to_string(),
        RefMeasured {
            build: secs(&v["build_seconds"]),
            solve: secs(&v["solve_seconds"]),
            objective: v["objective"].as_f64(),
            status: v["status"].as_str().unwrap_or("?").to_string(),
        },
    )
}

fn ms(d: Duration) -> String {
    let m = d.as_secs_f64() * 1e3;
    if m >= 100.0 {
        format!("{m:.0}")
    } else if m >= 10.0 {
        format!("{m:.1}")
    } else {
        format!("{m:.2}")
    }
}

fn rel_diff(a: Option<f64>, b: Option<f64>) -> String {
    match (a, b) {
        (Some(a), Some(b)) => format!("{:.1e}", (a - b).abs() / b.abs().max(1e-12)),
        _ => "-".into(),
    }
}

const HEADER: &str = "| N | S | model | method | rounds | runs | build ms | solve ms | total ms | other method | other total ms | other / used | other Δobj | ref build ms | ref solve ms | used / ref | direct / ref | ref Δobj |\n|---:|---:|---|---|---:|---:|---:|---:|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|";

/// Runs the benchmark, writing the table to `out` as it goes.
pub fn run(opts: &BenchOptions, out: &mut dyn Write) -> Result<()> {
    crate::error::fs::create_dir_all(&opts.work)?;
    let w = |out: &mut dyn Write, s: &str| {
        let _ = writeln!(out, "{s}");
        let _ = out.flush();
    };
    w(
        out,
        &format!(
            "tailpack {} bench: {}, {} run(s) per LP (median; one run after a run over {} s), time limit {} s per direct/reference LP",
            env!("CARGO_PKG_VERSION"),
            lp::backend_description(Backend::Highs),
            opts.runs,
            LONG_RUN.as_secs(),
            opts.time_limit
        ),
    );
    w(
        out,
        &format!(
            "cutting planes from {} scenarios on, every LP of a problem on one cut model (the families in the order max_return, min_cvar, max_ratio, each from the cuts the ones before it left); build = assembling the LP and handing it to the solver (plus cut generation), solve = inside the solver",
            models::CUTS_FROM_SCENARIOS
        ),
    );
    w(out, "");
    w(out, HEADER);
    let mut peaks = Vec::new();
    for &(n, s) in &opts.sizes {
        peaks.push(bench_size(opts, n, s, out)?);
    }
    w(out, "");
    for line in peaks {
        w(out, &line);
    }
    if let Some(config) = &opts.demo {
        w(out, "");
        w(out, &demo_end_to_end(config, &opts.work)?);
    }
    Ok(())
}

/// Benches one size and returns its line on peak memory.
fn bench_size(opts: &BenchOptions, n: usize, s: usize, out: &mut dyn Write) -> Result<String> {
    let fresh = reset_peak_memory();
    let peak = || crate::timings::peak_memory().filter(|_| fresh);
    let sy = synthetic(n, s, 20_261_130);
    let method = sy.problem().method();
    let direct_too = n * s <= DIRECT_UP_TO_CELLS || opts.direct_at_scale;
    let reference = match &opts.reference {
        Some(r) if direct_too => {
            let file = write_problem(&sy, &opts.work, opts.runs, opts.time_limit)?;
            run_reference(r, &file)?
        }
        _ => vec![],
    };
    let other_method = match method {
        Method::Direct => Method::Cuts,
        Method::Cuts => Method::Direct,
    };
    let used = measure(&sy, method, opts.runs);
    let used_peak = peak();
    let other = (opts.other_too && direct_too).then(|| {
        lp::set_time_limit(Some(opts.time_limit));
        let d = measure(&sy, other_method, opts.runs);
        lp::set_time_limit(None);
        d
    });
    for (k, (family, auto)) in used.iter().enumerate() {
        let name = family.name();
        let r = reference.iter().find(|(m, _)| m == name).map(|(_, r)| r);
        let line = row(
            (n, s, name),
            (method, auto),
            (other_method, other.as_ref().map(|o| &o[k].1)),
            r,
            opts.time_limit,
        );
        let _ = writeln!(out, "{line}");
        let _ = out.flush();
    }
    Ok(peak_line(
        (n, s),
        used_peak,
        other.as_ref().and(peak()),
        direct_too,
    ))
}

/// Resets this process's peak resident memory (`VmHWM`) to its current size (Linux: writing 5 to
/// /proc/self/clear_refs), so that each size's peak is its own. Elsewhere the peak stays cumulative,
/// which the line says by showing none.
fn reset_peak_memory() -> bool {
    crate::error::fs::write(Path::new("/proc/self/clear_refs"), "5").is_ok()
}

/// The peak-memory line of one size: the bench process's `VmHWM` after the method used (matrix, LPs,
/// cuts) and after the other method too; the reference runs in its own process and is not counted.
fn peak_line(
    (n, s): (usize, usize),
    used: Option<u64>,
    other: Option<u64>,
    direct_too: bool,
) -> String {
    let mb = |b: Option<u64>| b.map_or("-".into(), |b| format!("{:.0} MB", b as f64 / 1e6));
    let other = if direct_too {
        format!("with the other method too {}", mb(other))
    } else {
        format!(
            "the direct LP and the reference not run (N·S above {DIRECT_UP_TO_CELLS}; --direct-at-scale runs them)"
        )
    };
    format!(
        "peak memory (VmHWM) at {n} × {s}: the method used {}; {other}",
        mb(used)
    )
}

fn method_name(m: Method) -> &'static str {
    match m {
        Method::Direct => "direct",
        Method::Cuts => "cuts",
    }
}

/// One table row: the method tailpack uses, the other method, the reference.
fn row(
    (n, s, model): (usize, usize, &str),
    (method, auto): (Method, &Measured),
    (other_method, other): (Method, Option<&Measured>),
    r: Option<&RefMeasured>,
    time_limit: f64,
) -> String {
    let cell = |v: Option<String>| v.unwrap_or_else(|| "-".into());
    format!(
        "| {n} | {s} | {model} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
        method_name(method),
        auto.rounds,
        auto.runs,
        ms(auto.build),
        ms(auto.solve),
        if auto.status == "optimal" {
            ms(auto.total())
        } else {
            auto.status.clone()
        },
        cell(other.map(|_| method_name(other_method).to_string())),
        cell(other.map(|d| limited(d, time_limit))),
        cell(other.map(|d| format!(
            "{}{}×",
            if d.status == "optimal" { "" } else { "> " },
            ratio(d.total().as_secs_f64() / auto.total().as_secs_f64())
        ))),
        cell(other.map(|d| rel_diff(auto.objective, d.objective))),
        cell(r.map(|r| ms(r.build))),
        cell(r.map(|r| if r.status == "optimal" {
            ms(r.solve)
        } else {
            format!("{} ({})", ms(r.solve), r.status)
        })),
        cell(r.map(|r| against_reference(auto, r))),
        cell(r.and_then(|r| {
            // The reference solves the direct LP: this column compares like with like.
            let direct = if method == Method::Direct {
                Some(auto)
            } else {
                other
            };
            direct.map(|d| against_reference(d, r))
        })),
        cell(r.map(|r| rel_diff(auto.objective, r.objective))),
    )
}

/// tailpack's time over the reference's, as a bound when either side stopped at the time limit.
fn against_reference(d: &Measured, r: &RefMeasured) -> String {
    let x = d.total().as_secs_f64() / (r.build + r.solve).as_secs_f64();
    match (d.status == "optimal", r.status == "optimal") {
        (true, true) => ratio(x),
        (true, false) => format!("< {}", ratio(x)),
        (false, true) => format!("> {}", ratio(x)),
        (false, false) => "both stopped".into(),
    }
}

/// A time ratio with two or three significant figures (0.0021, 0.97, 12.5, 515).
fn ratio(x: f64) -> String {
    if x >= 100.0 {
        format!("{x:.0}")
    } else if x >= 10.0 {
        format!("{x:.1}")
    } else if x >= 0.1 || x <= 0.0 || !x.is_finite() {
        format!("{x:.2}")
    } else {
        let decimals = (-x.log10()).floor() as usize + 2;
        format!("{x:.decimals$}")
    }
}

fn limited(d: &Measured, limit: f64) -> String {
    if d.status == "optimal" {
        ms(d.total())
    } else if d.total().as_secs_f64() >= limit * 0.99 {
        format!("> {}", ms(d.total()))
    } else {
        d.status.clone()
    }
}

/// Builds the pack of `config` into a scratch root with a child `tailpack run --timings` and returns its
/// stage table, wall time and peak memory.
pub fn demo_end_to_end(config: &Path, work: &Path) -> Result<String> {
    let exe = std::env::current_exe().map_err(|source| Error::Binary {
        action: "find",
        path: PathBuf::from("/proc/self/exe"),
        source,
    })?;
    let root = work.join("demo-packs");
    let _ = std::fs::remove_dir_all(&root);
    let start = Instant::now();
    let child = Command::new(&exe)
        .arg("run")
        .arg(config)
        .arg("--out")
        .arg(&root)
        .arg("--quiet")
        .arg("--timings")
        .output()
        .map_err(|source| Error::Binary {
            action: "start",
            path: exe.clone(),
            source,
        })?;
    let wall = start.elapsed();
    let stderr = String::from_utf8_lossy(&child.stderr);
    if !child.status.success() {
        return Err(Error::DemoRun {
            config: config.to_path_buf(),
            code: child.status.code(),
            stderr: stderr.trim().to_string(),
        });
    }
    Ok(format!(
        "demo pack end to end ({}): {:.2} s wall as seen from outside\n{}",
        config.display(),
        wall.as_secs_f64(),
        stderr.trim_end()
    ))
}

#[cfg(test)]
mod tests {
    use super::ratio;

    #[test]
    fn ratios_keep_two_or_three_significant_figures() {
        assert_eq!(ratio(0.0021), "0.0021");
        assert_eq!(ratio(0.05), "0.050");
        assert_eq!(ratio(0.97), "0.97");
        assert_eq!(ratio(12.54), "12.5");
        assert_eq!(ratio(515.2), "515");
    }
}
