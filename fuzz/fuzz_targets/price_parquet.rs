//! Fuzz target: any bytes as a Parquet price file (the reader chooses Parquet by the `.parquet` name),
//! then the same layout and data-quality steps as the CSV target.

#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tailpack::config::Layout;

mod common;

fuzz_target!(|data: &[u8]| {
    common::prices_then_quality(Path::new("fuzz/prices.parquet"), data, Layout::Auto);
});
