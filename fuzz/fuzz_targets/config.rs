//! Fuzz target: any UTF-8 text as a config file, parsed and then validated (ranges, rules, paths). Each
//! input must give a config or an error naming a key or line, never a panic.

#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    // A folder that does not exist: the input files it names are then missing, which is itself a checked
    // error, and nothing on the machine is read.
    let path = Path::new("/nonexistent-fuzz-folder/fund.yaml");
    if let Ok(raw) = tailpack::config::parse(path, text) {
        let _ = tailpack::config::resolve(path, raw);
    }
});
