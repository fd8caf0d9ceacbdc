//! What both price targets do with a file that parsed: the ingest steps that work on the raw history.

use std::path::Path;
use tailpack::config::{Layout, QualityOptions};
use tailpack::ingest::{self, prices, quality};

/// Parses `data` as the price file `path`; if that succeeds, sorts, checks and fills it as a run would.
pub fn prices_then_quality(path: &Path, data: &[u8], layout: Layout) {
    let Ok(mut h) = prices::parse_prices(path, data, layout) else { return };
    let _ = quality::sort_dates(&mut h);
    let file = path.display().to_string();
    let _ = quality::duplicate_dates(&file, &h);
    let _ = quality::non_positive(&file, &h);
    let _ = ingest::default_as_of(&h.dates);
    let opts = QualityOptions::default();
    for (a, series) in h.assets.iter().zip(&h.values) {
        let start = series.len() / 2;
        let _ = quality::fill_asset(a, series, start, &opts);
        let _ = quality::fill_forward(series, opts.max_fill);
    }
}
