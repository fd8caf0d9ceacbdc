//! tailpack: month-end prices in, a committee-ready CVaR risk and allocation pack out.
//!
//! Data flows one way through one module per stage (numbered 0–10 in their module docs, in this order; `run`
//! and `commands` wire them); a stage only reads the outputs of earlier stages:
//! - [`config`]: the YAML config, validated and resolved (paths, ranges, unknown keys).
//! - [`ingest`]: price history, asset metadata and holdings; as-of cut; data-quality report and fill policy.
//! - [`scenarios`]: overlapping horizon windows of returns and their probabilities.
//! - [`risk`]: VaR, CVaR, component CVaR and other statistics of any weight vector.
//! - [`models`]: the three CVaR model families as LPs (HiGHS or Clarabel), with their preconditions.
//! - [`analysis`]: efficient frontier, stress set, walk-forward backtest with VaR backtests.
//! - [`run`]: wires the stages into one run and resolves rules that depend on earlier results.
//! - [`report`]: the committee PDF, typeset by typst from the run's results (PDF/A-2b), in a child process
//!   under a time and memory budget; custom templates read only inside their folder.
//! - [`archive`]: pack identity, revisions, manifest, index rows, locks, and the digests of verification.
//! - [`pack`]: writes the pack folder (scenarios, results, weights, summary, PDF) into the archive.
//! - [`signoff`]: above the archive: Ed25519 keys, signed statements and the signed finalisation, every
//!   check `verify` makes, and the index with each pack's sign-off.
//! - [`schema`]: JSON Schemas (draft 2020-12) of results.json, manifest.json, signoff.json and index.json,
//!   generated from the types that write or describe them.
//! - [`bench`]: synthetic LP benchmarks of the models, beside a reference solver, and the demo end to end.
//! - [`commands`]: one function per CLI subcommand; the binary is a thin layer over these.
//!
//! Cross-cutting: [`error`] (typed errors, exit codes, path-naming file helpers), [`diag`] (findings that
//! travel with results), [`csv_out`] (RFC 4180 quoting of every CSV written), [`demo`] (the deterministic
//! generator of the invented demo data), [`demo_scenarios`] (invented simulated scenario files of any size), [`random`] (the seeded random-number generator every random stream
//! uses), [`timings`] (time per stage, peak memory). A stage imports only
//! the stages above it and these; the suite's `layers` test holds every file to that.

pub mod analysis;
pub mod archive;
pub mod bench;
pub mod commands;
pub mod config;
pub mod csv_out;
pub mod demo;
pub mod demo_scenarios;
pub mod diag;
pub mod error;
pub mod ingest;
pub mod models;
pub mod pack;
pub mod random;
pub mod report;
pub mod risk;
pub mod run;
pub mod scenarios;
pub mod schema;
pub mod signoff;
pub mod timings;
