//! The integration suite: one test binary, one module per area.

mod analysis;
mod archive;
mod bad_inputs;
mod bench;
mod change;
mod cli;
mod common;
mod costs;
mod csv_quoting;
mod demo;
mod faults;
mod inputs;
mod layers;
mod liabilities;
mod models;
mod money;
mod parquet_bytes;
mod parquet_seeds;
mod pipes;
mod policy;
mod properties;
mod report;
mod risk;
mod signoff;
mod templates;
mod trades;
