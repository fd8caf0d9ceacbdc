//! The "Further analysis" section (`further` in `/data/report.json`, and its charts): one file per part,
//! each holding that part's display data and its charts — [`frontier`] (efficient frontier and the
//! max-ratio ray), [`stress`] (the stress set), [`backtest`] (the walk-forward backtest) and [`bands`]
//! (the estimation-error bands of each family's weights).
//!
//! A part that did not run is `null`, and its `*_absent` field carries the sentence that says why, so the
//! section states it plainly instead of vanishing (DEVELOPERS.md, "Adding a report section"). A part's
//! chart is drawn exactly when the part is shown, so the template can rely on it being there.
//!
//! May read: the [`RunResult`], the view model ([`super::view`]), [`super::format`] and the chart kit
//! ([`super::draw`]). The parts do not import each other.

pub mod backtest;
pub mod bands;
pub mod frontier;
pub mod stress;

use super::draw::Chart;
use super::view::Portfolio;
use crate::error::Result;
use crate::run::RunResult;
use serde::Serialize;

/// The three parts of the section; each is either shown or absent with its reason.
#[derive(Serialize)]
pub struct Further {
    pub frontier: Option<frontier::FrontierShow>,
    pub frontier_absent: Option<String>,
    pub stress: Option<stress::StressShow>,
    pub stress_absent: Option<String>,
    pub backtest: Option<backtest::BacktestShow>,
    pub backtest_absent: Option<String>,
    pub bands: Option<bands::BandsShow>,
    pub bands_absent: Option<String>,
}

/// Builds the section's data; `shown` are the portfolios in report order.
pub fn build(r: &RunResult, shown: &[Portfolio]) -> Further {
    let (frontier, frontier_absent) = split(frontier::show(r));
    let (stress, stress_absent) = split(stress::show(r, shown));
    let (backtest, backtest_absent) = split(backtest::show(r));
    let (bands, bands_absent) = split(bands::show(r));
    Further {
        frontier,
        frontier_absent,
        stress,
        stress_absent,
        backtest,
        backtest_absent,
        bands,
        bands_absent,
    }
}

fn split<T>(part: std::result::Result<T, String>) -> (Option<T>, Option<String>) {
    match part {
        Ok(t) => (Some(t), None),
        Err(why) => (None, Some(why)),
    }
}

/// The section's charts that have data: `frontier.svg`, `stress.svg`, `backtest-months.svg`,
/// `backtest-wealth.svg`, `bands-<family>.svg`.
pub fn charts(r: &RunResult, shown: &[Portfolio]) -> Result<Vec<Chart>> {
    let mut out: Vec<Chart> = Vec::new();
    out.extend(frontier::chart(r, shown)?);
    out.extend(stress::chart(r, shown)?);
    out.extend(backtest::charts(r)?);
    out.extend(bands::charts(r)?);
    Ok(out)
}
