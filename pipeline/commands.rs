//! One function per subcommand, each taking parsed arguments and returning what to print.
//!
//! Progress goes to stderr through [`Progress`] (silenced by `--quiet`); results go to stdout; errors are
//! returned to the binary, which prints them once with their causes.

use crate::error::Result;
use crate::run::{self, RunOptions};
use std::path::{Path, PathBuf};
use std::time::Duration;

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

/// `tailpack run`: builds the pack and returns the summary; its last line is the pack folder.
pub fn run(config: &Path, opts: &RunOptions, progress: &Progress) -> Result<String> {
    progress.step("reading config and data");
    let (cfg, data) = run::prepare(config, opts)?;
    progress.step("solving the CVaR models");
    let result = run::compute(cfg, data)?;
    progress.step("writing the pack");
    let (dir, text) = crate::pack::write(&result)?;
    progress.finish();
    Ok(format!("{text}{}\n", dir.display()))
}

/// `tailpack check`: validates config and data and returns the data-quality report.
pub fn check(config: &Path, opts: &RunOptions) -> Result<String> {
    let (cfg, data) = run::prepare(config, opts)?;
    let q = &data.quality;
    let mut out = format!(
        "config {} is valid\nprices {} ({} layout): {} to {}; as-of {}; scenario window {} to {} ({} observations)\nfill policy: {}\n",
        cfg.path.display(), cfg.prices.display(), data.layout.word(), data.history.0, data.history.1, data.as_of,
        q.window_start, q.window_end, q.observations, q.fill_policy);
    out.push_str(&format!("{:<14} {:>8} {:>7} {:>12} {:>12} {:>8} {}\n", "asset", "missing", "filled", "longest gap", "stale run", "extreme", "status"));
    for a in &q.assets {
        let status = if a.dropped { "dropped" } else { "kept" };
        out.push_str(&format!("{:<14} {:>8} {:>7} {:>12} {:>12} {:>8} {status}\n", a.asset, a.missing, a.filled, a.longest_gap, a.longest_stale_run, a.extreme_moves));
    }
    for f in &q.findings {
        out.push_str(&format!("{}: {}\n", f.level.word(), f.message));
    }
    Ok(out)
}

/// `tailpack demo-data DIR`: regenerates the invented demo data files.
pub fn demo_data(dir: &PathBuf) -> Result<String> {
    let s = crate::demo::write_demo_data(dir).map_err(|source| crate::error::Error::Io { action: "cannot write demo data to", path: dir.clone(), source })?;
    Ok(format!("wrote synthetic demo data for {} assets, {} business days ({} to {}) to {}\n", s.assets, s.days, s.first, s.last, dir.display()))
}
