//! The `tailpack` binary: parses arguments, calls one library function per subcommand, prints the result
//! or the error (once, with its causes), and exits with the documented code.
//!
//! Nothing here uses `print!`/`eprint!`, which panic when the reader has gone away: `tailpack run … |
//! head -1` closes stdout while the pack is being written, and the run must still exit with its own code.

use clap::{Parser, Subcommand};
use std::path::PathBuf;
use tailpack::bench::{BenchOptions, Reference};
use tailpack::commands::RunOptions;
use tailpack::config::{Backend, Overrides};

#[derive(Parser)]
#[command(
    name = "tailpack",
    version,
    about = "Monthly CVaR risk and allocation packs for an investment committee"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

/// A pack, a required role and that role's key: what `sign` and `finalize` take.
#[derive(clap::Args)]
struct SignArgs {
    /// The pack folder, e.g. out/<fund>/<as-of>/r1.
    pack: PathBuf,
    /// The role, as listed under signoff.roles in the config.
    #[arg(long)]
    role: String,
    /// The role's secret key file made by `tailpack keygen`.
    #[arg(long)]
    key: PathBuf,
    /// The signer's name: printed on the sign-off page, or recorded in the finalisation (default: the role).
    #[arg(long)]
    name: Option<String>,
}

/// What `run` takes.
#[derive(clap::Args)]
struct RunArgs {
    /// The fund's YAML config.
    config: PathBuf,
    /// Pack root folder (overrides output.root).
    #[arg(long)]
    out: Option<PathBuf>,
    /// As-of date YYYY-MM-DD (default: the latest month-end in the data).
    #[arg(long)]
    as_of: Option<chrono::NaiveDate>,
    /// LP backend: highs (simplex, default) or clarabel (interior point).
    #[arg(long)]
    solver: Option<Backend>,
    /// No progress output on stderr.
    #[arg(long)]
    quiet: bool,
    /// Seconds to wait for another run's lock on the same archive (then exit 6).
    #[arg(long, default_value_t = RunOptions::default().lock_timeout.as_secs())]
    lock_timeout: u64,
    /// Print the wall time of each stage and the peak memory on stderr at the end.
    #[arg(long)]
    timings: bool,
}

impl RunArgs {
    fn options(&self) -> RunOptions {
        RunOptions {
            overrides: Overrides {
                as_of: self.as_of,
                out: self.out.clone(),
                backend: self.solver,
            },
            lock_timeout: std::time::Duration::from_secs(self.lock_timeout),
            quiet: self.quiet,
            timings: self.timings,
        }
    }
}

/// What `bench` takes; the defaults are `BenchOptions::default()`'s.
#[derive(clap::Args)]
struct BenchArgs {
    /// Sizes as ASSETSxSCENARIOS, comma-separated (default: 40x200,440x200,100x2500,500x5000,500x20000,1000x50000,2000x100000).
    #[arg(long, value_delimiter = ',', value_parser = tailpack::bench::parse_size)]
    sizes: Vec<(usize, usize)>,
    /// Runs per LP; the median is printed.
    #[arg(long, default_value_t = BenchOptions::default().runs)]
    runs: usize,
    /// Also solve each problem with this reference script (e.g. tests/reference/bench_reference.py).
    #[arg(long)]
    reference: Option<PathBuf>,
    /// The interpreter for the reference script.
    #[arg(long, default_value = "python3")]
    python: String,
    /// Time only the method tailpack chooses at each size, not also the other one (direct LP or cutting planes).
    #[arg(long)]
    chosen_only: bool,
    /// Seconds allowed per LP run of the other method and of the reference.
    #[arg(long, default_value_t = BenchOptions::default().time_limit)]
    time_limit: f64,
    /// Also run the direct LP and the reference above 5·10^7 cells N·S, each stopped at the time limit
    /// (at 2,000 × 100,000 each side holds gigabytes: 2·10^8 nonzeros).
    #[arg(long)]
    direct_at_scale: bool,
    /// Build this config's pack end to end with stage timings (e.g. config-demo/fund.yaml).
    #[arg(long)]
    demo: Option<PathBuf>,
    /// Scratch folder for problem files and the demo pack.
    #[arg(long, default_value_os_t = BenchOptions::default().work)]
    work: PathBuf,
}

impl BenchArgs {
    fn options(&self) -> BenchOptions {
        BenchOptions {
            sizes: if self.sizes.is_empty() {
                BenchOptions::default().sizes
            } else {
                self.sizes.clone()
            },
            runs: self.runs,
            reference: self.reference.as_ref().map(|script| Reference {
                program: self.python.clone(),
                script: script.clone(),
            }),
            other_too: !self.chosen_only,
            time_limit: self.time_limit,
            direct_at_scale: self.direct_at_scale,
            demo: self.demo.clone(),
            work: self.work.clone(),
        }
    }
}

#[derive(Subcommand)]
enum Command {
    /// Build the pack for one month-end: scenarios, the three CVaR models, results and summary.
    Run(RunArgs),
    /// Time the three models on synthetic problems (build and solve apart), optionally beside a reference
    /// solver script, and the demo pack end to end. Prints figures; release builds give meaningful ones.
    Bench(BenchArgs),
    /// Make an Ed25519 key pair for signing packs: PREFIX.key (secret) and PREFIX.pub (public).
    Keygen {
        /// Path prefix of the two files, e.g. keys/risk-reviewer.
        prefix: PathBuf,
    },
    /// Sign a pack for one role with that role's key; refused if the pack fails verify or the role signed.
    Sign(SignArgs),
    /// Render the final PDF once every required role has signed and seal it with one of their keys (any
    /// role that has signed, e.g. the last signer); the pack is immutable afterwards.
    Finalize(SignArgs),
    /// Recompute every digest of a pack, or of every pack under an archive root with its index; any
    /// changed, missing or unlisted file fails (exit 7).
    Verify {
        /// The pack folder, e.g. out/<fund>/<as-of>/r1, or an archive root (e.g. out) to sweep every pack.
        pack: PathBuf,
        /// Also re-run from the archived inputs and compare every output byte for byte.
        #[arg(long)]
        rerun: bool,
        /// With an archive root: also write the sweep's report as JSON to this file.
        #[arg(long)]
        report: Option<PathBuf>,
        /// With an archive root: no progress bar on stderr.
        #[arg(long)]
        quiet: bool,
    },
    /// Validate the config and data and print the data-quality report; non-zero exit on errors.
    Check {
        config: PathBuf,
        #[arg(long)]
        as_of: Option<chrono::NaiveDate>,
    },
    /// Regenerate the invented demo data (prices, assets, holdings) into a folder.
    DemoData {
        /// Target folder, e.g. config-demo/data.
        dir: PathBuf,
    },
    /// Write an invented simulated scenario file (scenarios.csv, with assets.csv and holdings.csv) into a
    /// folder: deterministic, for `data.scenarios` demos and measurements at scale.
    DemoScenarios {
        /// Target folder, e.g. config-demo/simulated.
        dir: PathBuf,
        /// Number of assets (columns).
        #[arg(long, default_value_t = 50)]
        assets: usize,
        /// Number of scenarios (rows).
        #[arg(long, default_value_t = 5000)]
        scenarios: usize,
    },
    /// Internal: typesets one PDF from a prepared file set on stdin, under the given limits.
    #[command(name = "typeset-child", hide = true)]
    TypesetChild {
        #[arg(long)]
        memory_mb: u64,
        #[arg(long)]
        seconds: u64,
    },
}

/// Prints a sign-off command's warnings on stderr; its text goes to stdout with exit 0.
fn signed(s: tailpack::commands::Signed) -> (String, i32) {
    for w in &s.warnings {
        eprintln!("warning: {w}");
    }
    (s.text, 0)
}

fn main() {
    let cli = Cli::parse();
    if let Command::TypesetChild { memory_mb, seconds } = cli.command {
        std::process::exit(tailpack::report::typeset::serve(memory_mb, seconds));
    }
    tailpack::report::typeset::this_binary_serves();
    let result = match &cli.command {
        Command::Run(a) => {
            let ran = tailpack::commands::run_timed(&a.config, &a.options());
            if let Some(t) = &ran.timings {
                let _ = emit(Stream::Err, t);
            }
            ran.outcome.map(|r| (r.text, r.code))
        }
        Command::Bench(a) => tailpack::commands::bench(&a.options()).map(|t| (t, 0)),
        Command::Keygen { prefix } => tailpack::commands::keygen(prefix).map(|t| (t, 0)),
        Command::Sign(a) => {
            tailpack::commands::sign(&a.pack, &a.role, &a.key, a.name.as_deref()).map(signed)
        }
        Command::Finalize(a) => {
            tailpack::commands::finalize(&a.pack, &a.role, &a.key, a.name.as_deref()).map(signed)
        }
        Command::Verify {
            pack,
            rerun,
            report,
            quiet,
        } => verify(pack, *rerun, report, *quiet),
        Command::Check { config, as_of } => tailpack::commands::check(
            config,
            &Overrides {
                as_of: *as_of,
                ..Default::default()
            },
        )
        .map(|t| (t, 0)),
        Command::DemoData { dir } => tailpack::commands::demo_data(dir).map(|t| (t, 0)),
        Command::DemoScenarios {
            dir,
            assets,
            scenarios,
        } => tailpack::commands::demo_scenarios(dir, *assets, *scenarios).map(|t| (t, 0)),
        Command::TypesetChild { .. } => unreachable!("handled above"),
    };
    match result {
        Ok((text, code)) => {
            if let Err(e) = emit(Stream::Out, &text) {
                let _ = emit(
                    Stream::Err,
                    &format!("error: cannot write the results to stdout: {e}\n"),
                );
                std::process::exit(tailpack::error::EXIT_FAILURE);
            }
            std::process::exit(code);
        }
        Err(e) => {
            let _ = emit(Stream::Err, &error_text(&e));
            std::process::exit(e.exit_code());
        }
    }
}

/// `verify` on a pack, or the sweep of an archive root (`--report` belongs to the sweep alone).
fn verify(
    path: &std::path::Path,
    rerun: bool,
    report: &Option<PathBuf>,
    quiet: bool,
) -> tailpack::error::Result<(String, i32)> {
    use tailpack::commands::sweep;
    if !sweep::is_archive_root(path) {
        if report.is_some() {
            use clap::CommandFactory;
            Cli::command()
                .error(
                    clap::error::ErrorKind::ArgumentConflict,
                    format!(
                        "--report goes with an archive root; {} is not one (it holds no index.json)",
                        path.display()
                    ),
                )
                .exit();
        }
        return tailpack::commands::verify(path, rerun).map(|t| (t, 0));
    }
    let opts = sweep::SweepOptions {
        rerun,
        report: report.clone(),
        quiet,
    };
    sweep::sweep(path, &opts).map(|s| (s.text, s.code))
}

/// The error line and each cause not already in it.
fn error_text(e: &tailpack::error::Error) -> String {
    let text = e.to_string();
    let mut out = format!("error: {text}\n");
    let mut source = std::error::Error::source(e);
    while let Some(s) = source {
        let cause = s.to_string();
        if !text.contains(&cause) {
            out.push_str(&format!("  caused by: {cause}\n"));
        }
        source = s.source();
    }
    out
}

enum Stream {
    Out,
    Err,
}

/// Writes `text` to stdout or stderr and flushes. A reader that has gone away (broken pipe) is not a
/// failure of the command — the pack is already written — so it is ignored and the exit code stays the
/// command's own; any other write error is returned.
fn emit(to: Stream, text: &str) -> std::io::Result<()> {
    use std::io::Write;
    let written = match to {
        Stream::Out => {
            let mut h = std::io::stdout().lock();
            h.write_all(text.as_bytes()).and_then(|()| h.flush())
        }
        Stream::Err => {
            let mut h = std::io::stderr().lock();
            h.write_all(text.as_bytes()).and_then(|()| h.flush())
        }
    };
    match written {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        other => other,
    }
}
