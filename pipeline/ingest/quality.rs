//! Data-quality checks and the fill policy, applied to the price history up to as-of.
//!
//! Blocking problems (non-positive prices, prices of one asset more than a millionfold apart, duplicate
//! dates, too few scenarios) are `fail` findings; the caller turns them into an error. Everything else is a
//! `warn` or `pass` finding that travels with the results. The fill policy: a missing price is carried
//! forward from the last observation for at most `max_fill` consecutive observations; an asset with a
//! longer gap inside the scenario window, or with no price at the window's start, is dropped with a warning.

use super::prices::PriceHistory;
use crate::config::QualityOptions;
use crate::diag::{Check, Level};
use chrono::NaiveDate;
use serde::Serialize;

/// Per-asset counts for the data-quality report.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct AssetQuality {
    /// Asset code.
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
    /// Whether the asset was dropped for too few observations.
    pub dropped: bool,
}

/// The data-quality report of one run.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct QualityReport {
    /// The fill policy applied to missing prices, in words.
    pub fill_policy: String,
    /// First date of the scenario window (YYYY-MM-DD).
    pub window_start: NaiveDate,
    /// Last date of the scenario window (YYYY-MM-DD).
    pub window_end: NaiveDate,
    /// Price observations in the window (a count).
    pub observations: usize,
    /// Per asset, its counts (prices, runs and moves are counts of observations).
    pub assets: Vec<AssetQuality>,
    /// The policy's non-investable benchmark series, counted by the same rules (never dropped: a gap the
    /// fill policy cannot fill is an error).
    pub reference_series: Vec<AssetQuality>,
    /// The data-quality findings, as checks.
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
    for (a, col) in h.values.iter().enumerate() {
        if let Some((r, p)) = col
            .iter()
            .enumerate()
            .find_map(|(r, v)| v.filter(|p| *p <= 0.0).map(|p| (r, p)))
        {
            out.push(Check::fail("quality.non_positive", format!(
                "{path}: {}: price {p} on {} is not positive; prices must be > 0 (correct the feed or leave the cell blank)",
                h.cell(a, r), h.dates[r])));
        }
    }
    out
}

/// The most the highest price of one asset may be above its lowest, up to as-of: a factor of 10^6. Every
/// return tailpack computes from an asset's prices — scenario windows, daily and monthly backtest returns,
/// historical stress windows — is a ratio of two of them minus 1, so this bounds every return to
/// −1 + 10^-6 ≤ r ≤ 10^6 − 1: finite, and small enough that LP coefficients, expected returns and losses
/// summed over scenarios stay finite. A sanity rule (common practice, not a published standard): a traded
/// price that moves a millionfold within one history is a corrupt cell, a misplaced exponent or mixed units.
pub const MAX_PRICE_RANGE: f64 = 1e6;

/// Prices of one asset whose ratio overflows a 64-bit float or exceeds [`MAX_PRICE_RANGE`]: blocking (at
/// most ten assets are listed). The message names first the cell farther from the asset's median price
/// (on a log scale) — the likely culprit, such as a subnormal 1e-320 or a 1e308 — then the cell at the
/// other end of the range, each with its row, line and date.
pub fn overflowing_range(path: &str, h: &PriceHistory) -> Vec<Check> {
    (0..h.assets.len())
        .filter_map(|a| range_problem(path, h, a))
        .take(10)
        .collect()
}

fn range_problem(path: &str, h: &PriceHistory, a: usize) -> Option<Check> {
    let priced: Vec<(usize, f64)> = h.values[a]
        .iter()
        .enumerate()
        .filter_map(|(r, v)| v.filter(|p| *p > 0.0).map(|p| (r, p)))
        .collect();
    let lo = *priced.iter().min_by(|x, y| x.1.total_cmp(&y.1))?;
    let hi = *priced.iter().max_by(|x, y| x.1.total_cmp(&y.1))?;
    let ratio = hi.1 / lo.1;
    if ratio.is_finite() && ratio <= MAX_PRICE_RANGE {
        return None;
    }
    let median = median(priced.iter().map(|p| p.1).collect());
    let off = |p: f64| (p.ln() - median.ln()).abs();
    let (bad, other) = if off(lo.1) >= off(hi.1) {
        (lo, hi)
    } else {
        (hi, lo)
    };
    let what = if ratio.is_finite() {
        format!(
            "their ratio is {ratio:.3e}, more than the {MAX_PRICE_RANGE:e} one asset's prices may span"
        )
    } else {
        "their ratio overflows a 64-bit float".to_string()
    };
    Some(Check::fail(
        "quality.price_range",
        format!(
            "{path}: {}: price {} on {} against {} at {} on {}: {what} (a sanity rule: every return is a ratio of two prices of one asset), so returns between them cannot be used: check the cell, its units or its exponent",
            h.cell(a, bad.0),
            number(bad.1),
            h.dates[bad.0],
            number(other.1),
            h.places_of(a, other.0),
            h.dates[other.0],
        ),
    ))
}

/// A price as written in a plain feed (`92.5565`), or in exponent form when very large or small (`1e308`).
fn number(v: f64) -> String {
    if (1e-4..1e9).contains(&v.abs()) {
        v.to_string()
    } else {
        format!("{v:e}")
    }
}

/// The median of positive values (the lower middle one for an even count).
fn median(mut v: Vec<f64>) -> f64 {
    let mid = (v.len() - 1) / 2;
    *v.select_nth_unstable_by(mid, f64::total_cmp).1
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
    frequency: crate::config::Frequency,
    opts: &QualityOptions,
) -> Check {
    let independent = observations.saturating_sub(1) / horizon.max(1);
    let need = opts.min_obs_per_asset * assets;
    let msg = format!(
        "{observations} observations for {assets} assets ({:.1} per asset; rule of thumb ≥ {}), {independent} non-overlapping {}-{} windows (rule of thumb ≥ number of assets)",
        observations as f64 / assets.max(1) as f64,
        opts.min_obs_per_asset,
        horizon,
        frequency.period()
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
    h.keep_rows(&idx);
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
