//! Fuzz target: any bytes as a CSV price file, through the reader, both layouts and the data-quality
//! checks that run before scenarios are cut. Each input must give a price history or an error, never a
//! panic.

#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tailpack::config::Layout;

mod common;

fuzz_target!(|data: &[u8]| {
    for layout in [Layout::Auto, Layout::Wide, Layout::Long] {
        common::prices_then_quality(Path::new("fuzz/prices.csv"), data, layout);
    }
});
