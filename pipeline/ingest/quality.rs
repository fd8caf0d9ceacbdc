//! Data-quality checks and the fill policy, applied to the price history up to as-of.
//!
//! Blocking problems (non-positive prices, prices whose ratio overflows, duplicate dates, too few
//! scenarios) are `fail` findings; the caller turns them into an error. Everything else is a `warn` or
//! `pass` finding that travels with the results. The fill policy: a missing price is carried forward from
//! the last observation for at most `max_fill` consecutive observations; an asset with a longer gap inside
//! the scenario window, or with no price at the window's start, is dropped with a warning.

use super::prices::PriceHistory;
use crate::config::QualityOptions;
use crate::diag::{Check, Level};
use chrono::NaiveDate;
use serde::Serialize;

/// Per-asset counts for the data-quality report.
#[derive(Debug, Clone, Serialize)]
pub struct AssetQuality {
    pub asset: String,
    /// Missing prices inside the scenario window.
    pub missing: usize,
    /// Of those, how many were filled forward.
    pub filled: usize,
    /// Longest run of consecutive missing prices in the window.
    pub longest_gap: usize,
    /// Longest run of identical consecutive prices in the window.
    pub longest_stale_run: usize,
    /// Single-period moves above the extreme-move threshold.
    pub extreme_moves: usize,
    pub dropped: bool,
}

/// The data-quality report of one run.
#[derive(Debug, Clone, Serialize)]
pub struct QualityReport {
    pub fill_policy: String,
    pub window_start: NaiveDate,
    pub window_end: NaiveDate,
    pub observations: usize,
    pub assets: Vec<AssetQuality>,
    pub findings: Vec<Check>,
}

impl QualityReport {
    /// Blocking findings, as messages.
    pub fn failures(&self) -> Vec<String> {
        self.findings
            .iter()
            .filter(|f| f.level == Level::Fail)
            .map(|f| f.message.clone())
            .collect()
    }
}

/// Prices of one asset after the fill policy, window rows only.
pub struct Filled {
    pub values: Vec<f64>,
    pub quality: AssetQuality,
    pub note: Option<Check>,
}

/// Applies the fill policy to one asset over the whole history up to as-of, then measures the window
/// `[start, end)` row range. `None` values that remain mean the asset must be dropped.
pub fn fill_asset(
    asset: &str,
    series: &[Option<f64>],
    start: usize,
    opts: &QualityOptions,
) -> Filled {
    let mut values = Vec::with_capacity(series.len() - start);
    let (mut last, mut gap, mut missing, mut filled, mut longest, mut unfillable) =
        (None, 0usize, 0, 0, 0, None);
    for (i, v) in series.iter().enumerate() {
        match v {
            Some(p) => {
                last = Some(*p);
                gap = 0;
            }
            None => gap += 1,
        }
        if i < start {
            continue;
        }
        if v.is_none() {
            missing += 1;
            longest = longest.max(gap);
            if last.is_some() && gap <= opts.max_fill {
                filled += 1;
            } else if unfillable.is_none() {
                unfillable = Some(i);
            }
        }
        values.push(last.unwrap_or(f64::NAN));
    }
    let mut quality = AssetQuality {
        asset: asset.to_string(),
        missing,
        filled,
        longest_gap: longest,
        longest_stale_run: longest_stale(&values),
        extreme_moves: 0,
        dropped: unfillable.is_some(),
    };
    quality.extreme_moves = count_extreme(&values, opts.extreme_move);
    let note = unfillable.map(|_| {
        drop_note(
            asset,
            longest,
            last.is_none() || values.first().is_some_and(|v| v.is_nan()),
            opts.max_fill,
        )
    });
    Filled {
        values,
        quality,
        note,
    }
}

/// The fill policy on a whole series: a missing price takes the last observation when the gap so far is at
/// most `max_fill`; otherwise (and before the first price) it stays NaN.
pub fn fill_forward(series: &[Option<f64>], max_fill: usize) -> Vec<f64> {
    let (mut last, mut gap) = (f64::NAN, 0usize);
    series
        .iter()
        .map(|v| match v {
            Some(p) => {
                last = *p;
                gap = 0;
                *p
            }
            None => {
                gap += 1;
                if gap <= max_fill { last } else { f64::NAN }
            }
        })
        .collect()
}

fn drop_note(asset: &str, gap: usize, no_start: bool, max_fill: usize) -> Check {
    let why = if no_start {
        "has no price at the start of the scenario window (its history starts later)".to_string()
    } else {
        format!(
            "has a gap of {gap} consecutive missing prices, more than quality.max_fill = {max_fill}"
        )
    };
    Check::warn(
        "quality.dropped_asset",
        format!("asset `{asset}` {why}; it is dropped from this run"),
    )
}

fn longest_stale(values: &[f64]) -> usize {
    let (mut best, mut run) = (0, 1);
    for w in values.windows(2) {
        run = if w[0] == w[1] && !w[0].is_nan() {
            run + 1
        } else {
            1
        };
        best = best.max(run);
    }
    if values.len() < 2 { values.len() } else { best }
}

fn count_extreme(values: &[f64], threshold: f64) -> usize {
    values
        .windows(2)
        .filter(|w| (w[1] / w[0] - 1.0).abs() > threshold)
        .count()
}

/// Non-positive prices anywhere up to as-of: blocking.
pub fn non_positive(path: &str, h: &PriceHistory) -> Vec<Check> {
    let mut out = Vec::new();
    for (a, col) in h.assets.iter().zip(&h.values) {
        if let Some((r, p)) = col
            .iter()
            .enumerate()
            .find_map(|(r, v)| v.filter(|p| *p <= 0.0).map(|p| (r, p)))
        {
            out.push(Check::fail("quality.non_positive", format!(
                "{path}: {}, column `{a}`: price {p} on {} is not positive; prices must be > 0 (correct the feed or leave the cell blank)",
                h.places[r], h.dates[r])));
        }
    }
    out
}

/// Prices whose ratio overflows a 64-bit float: blocking. Every return of the run is a ratio of two prices
/// of one asset, so the largest over the smallest must be finite; otherwise scenarios would hold infinite
/// returns (a subnormal price such as 1e-320 is the usual cause: a feed in the wrong units or a corrupt
/// cell), which no LP can solve and no statistic survives.
pub fn overflowing_range(path: &str, h: &PriceHistory) -> Vec<Check> {
    let mut out = Vec::new();
    for (a, col) in h.assets.iter().zip(&h.values) {
        let priced = || {
            col.iter()
                .enumerate()
                .filter_map(|(r, v)| v.filter(|p| *p > 0.0).map(|p| (r, p)))
        };
        let (Some(lo), Some(hi)) = (
            priced().min_by(|x, y| x.1.total_cmp(&y.1)),
            priced().max_by(|x, y| x.1.total_cmp(&y.1)),
        ) else {
            continue;
        };
        if !(hi.1 / lo.1).is_finite() {
            out.push(Check::fail("quality.price_range", format!(
                "{path}: {}, column `{a}`: price {:e} is so small next to {:e} (at {}) that their ratio overflows; returns cannot be computed: check the prices' units or the cell",
                h.places[lo.0], lo.1, hi.1, h.places[hi.0])));
        }
    }
    out
}

/// Duplicate dates: blocking, with both rows named.
pub fn duplicate_dates(path: &str, h: &PriceHistory) -> Vec<Check> {
    let mut idx: Vec<usize> = (0..h.dates.len()).collect();
    idx.sort_by_key(|&i| (h.dates[i], i));
    idx.windows(2)
        .filter(|w| h.dates[w[0]] == h.dates[w[1]])
        .take(10)
        .map(|w| {
            Check::fail(
                "quality.duplicate_date",
                format!(
                    "{path}: date {} appears twice, at {} and {}; keep one row per date",
                    h.dates[w[0]], h.places[w[0]], h.places[w[1]]
                ),
            )
        })
        .collect()
}

/// Findings about stale runs and extreme moves, from the per-asset counts.
pub fn series_findings(assets: &[AssetQuality], opts: &QualityOptions) -> Vec<Check> {
    let stale: Vec<String> = assets
        .iter()
        .filter(|a| !a.dropped && a.longest_stale_run >= opts.stale_run)
        .map(|a| {
            format!(
                "`{}` ({} identical prices in a row)",
                a.asset, a.longest_stale_run
            )
        })
        .collect();
    let extreme: Vec<String> = assets
        .iter()
        .filter(|a| !a.dropped && a.extreme_moves > 0)
        .map(|a| format!("`{}` ({}×)", a.asset, a.extreme_moves))
        .collect();
    let filled: usize = assets.iter().filter(|a| !a.dropped).map(|a| a.filled).sum();
    vec![
        flag(
            "quality.stale_run",
            &stale,
            format!(
                "no stale runs of {} or more identical prices",
                opts.stale_run
            ),
            format!(
                "stale prices (a run of at least {} identical observations; check the feed)",
                opts.stale_run
            ),
        ),
        flag(
            "quality.extreme_move",
            &extreme,
            format!(
                "no single-period move beyond ±{:.0}%",
                opts.extreme_move * 100.0
            ),
            format!(
                "single-period moves beyond ±{:.0}% (verify against a second source)",
                opts.extreme_move * 100.0
            ),
        ),
        if filled == 0 {
            Check::pass(
                "quality.missing",
                "no missing prices in the scenario window",
            )
        } else {
            Check::warn(
                "quality.missing",
                format!(
                    "{filled} missing price(s) in the scenario window were filled forward (at most {} in a row)",
                    opts.max_fill
                ),
            )
        },
    ]
}

fn flag(id: &str, items: &[String], ok: String, what: String) -> Check {
    if items.is_empty() {
        Check::pass(id, ok)
    } else {
        Check::warn(id, format!("{what}: {}", items.join(", ")))
    }
}

/// Rule of thumb (common practice, not a theorem): at least `min_obs_per_asset` observations per asset in the
/// window, and at least as many non-overlapping horizon windows as assets, before trusting a scenario set to
/// discriminate between portfolios.
pub fn history_length(
    observations: usize,
    assets: usize,
    horizon: usize,
    opts: &QualityOptions,
) -> Check {
    let independent = observations.saturating_sub(1) / horizon.max(1);
    let need = opts.min_obs_per_asset * assets;
    let msg = format!(
        "{observations} observations for {assets} assets ({:.1} per asset; rule of thumb ≥ {}), {independent} non-overlapping {horizon}-observation windows (rule of thumb ≥ number of assets)",
        observations as f64 / assets.max(1) as f64,
        opts.min_obs_per_asset
    );
    if observations >= need && independent >= assets {
        Check::pass("quality.history_length", msg)
    } else {
        Check::warn(
            "quality.history_length",
            format!("history is short for the universe: {msg}"),
        )
    }
}

/// Unsorted input rows: sorted for the run, with a warning.
pub fn sort_dates(h: &mut PriceHistory) -> Option<Check> {
    if h.dates.windows(2).all(|w| w[0] <= w[1]) {
        return None;
    }
    let first = h.dates.windows(2).position(|w| w[0] > w[1]).unwrap_or(0) + 1;
    let msg = format!(
        "rows are not in date order (first at {}: {} after {}); sorted by date for this run",
        h.places[first],
        h.dates[first],
        h.dates[first - 1]
    );
    let mut idx: Vec<usize> = (0..h.dates.len()).collect();
    idx.sort_by_key(|&i| (h.dates[i], i));
    h.dates = idx.iter().map(|&i| h.dates[i]).collect();
    h.places = idx.iter().map(|&i| h.places[i].clone()).collect();
    for col in &mut h.values {
        *col = idx.iter().map(|&i| col[i]).collect();
    }
    Some(Check::warn("quality.unsorted", msg))
}

/// Severity of the worst finding.
pub fn worst(findings: &[Check]) -> Level {
    findings
        .iter()
        .map(|f| f.level)
        .max()
        .unwrap_or(Level::Pass)
}
