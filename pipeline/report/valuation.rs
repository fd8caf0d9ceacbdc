//! Assets valued monthly or quarterly in the pack: the "Valuation and unsmoothing" table of appendix B
//! (each such asset's valuation frequency, Geltner ρ and its source, the autocorrelation estimate with its
//! standard error, observed against unsmoothed volatility) and the caveats on month-end scenarios and
//! unsmoothed valuations.
//!
//! May read: the [`RunResult`]'s market data (`valuation`, `frequency`) and scenario count; formats with
//! [`super::format`].

use super::format::{self, Style, pct};
use super::text::Caveat;
use crate::config::Frequency;
use crate::ingest::valuation::AssetValuation;
use crate::run::RunResult;
use serde::Serialize;

/// The appendix B table; `None` when every asset is valued daily and none is unsmoothed.
#[derive(Serialize)]
pub struct Unsmoothing {
    pub rows: Vec<Row>,
    /// What the columns mean, with the period of one return.
    pub note: String,
}

/// One asset's row, formatted.
#[derive(Serialize)]
pub struct Row {
    pub asset: String,
    pub valuation: String,
    pub rho: String,
    pub source: String,
    pub estimate: String,
    pub standard_error: String,
    pub observed: String,
    pub unsmoothed: String,
}

/// The table's display data.
pub fn show(r: &RunResult) -> Option<Unsmoothing> {
    let rows: Vec<Row> = r
        .data
        .valuation
        .iter()
        .filter(|v| v.unsmoothed.is_some() || v.valuation != Frequency::Daily)
        .map(row)
        .collect();
    if rows.is_empty() {
        return None;
    }
    let period = r.data.frequency.period();
    Some(Unsmoothing {
        rows,
        note: format!(
            "ρ: Geltner's smoothing parameter, R = (R* − ρ·R*₋₁)/(1 − ρ) (Geltner 1993), given in the config or estimated as the first-order autocorrelation r₁ of the observed returns over the scenario window (0 when negative). r₁ ± standard error √((1 − r₁²)/n) (Bartlett 1946). Volatilities are standard deviations of the returns over one {period}, observed (appraisal) and unsmoothed; for a first-order smoothed series the unsmoothed one is about the observed × √((1 + ρ)/(1 − ρ))."
        ),
    })
}

fn row(v: &AssetValuation) -> Row {
    let (rho, source, observed, unsmoothed) = match &v.unsmoothed {
        Some(u) => (
            format::number(u.rho, 2),
            u.rho_source.to_string(),
            pct(u.observed_volatility, Style::Weight),
            pct(u.unsmoothed_volatility, Style::Weight),
        ),
        None => (
            format::NONE.into(),
            "not unsmoothed".into(),
            format::NONE.into(),
            format::NONE.into(),
        ),
    };
    Row {
        asset: v.asset.clone(),
        valuation: v.valuation.word().into(),
        rho,
        source,
        estimate: v
            .autocorrelation
            .map_or(format::NONE.into(), |x| format::number(x, 2)),
        standard_error: v
            .standard_error
            .map_or(format::NONE.into(), |x| format::number(x, 2)),
        observed,
        unsmoothed,
    }
}

/// The method appendix's paragraph on month-end sampling and unsmoothing; `None` at a daily frequency
/// with no asset unsmoothed.
pub fn method(r: &RunResult) -> Option<String> {
    let freq = r.data.frequency;
    let any = r.data.valuation.iter().any(|v| v.unsmoothed.is_some());
    if freq == Frequency::Daily && !any {
        return None;
    }
    let sampling = match freq {
        Frequency::Daily => String::new(),
        f => format!(
            "Here an observation is the last price of each calendar {} up to the as-of date (scenarios.frequency: {}): each series takes its last observation within the {}, never a later one. ",
            f.period(),
            f.word(),
            f.period()
        ),
    };
    let unsmoothing = if any {
        "Assets marked for unsmoothing have their observed returns R* replaced, before scenarios are cut, by Geltner's R_t = (R*_t − ρ·R*_(t−1)) / (1 − ρ) (Geltner 1993, Journal of Real Estate Research 8(3)), the first return kept as observed, and their price index rebuilt from R_t; ρ is given in the config or estimated as the first-order autocorrelation of the observed returns over the scenario window (Box, Jenkins & Reinsel, Time Series Analysis, eq. 2.1.12), with standard error √((1 − ρ²)/n) (Bartlett 1946). Appendix B lists each such asset."
    } else {
        ""
    };
    Some(format!("{sampling}{unsmoothing}").trim_end().to_string())
}

/// The caveats: few scenarios at a monthly or quarterly frequency, and what unsmoothing rests on.
pub fn caveats(r: &RunResult) -> Vec<Caveat> {
    let mut out = Vec::new();
    let freq = r.data.frequency;
    if freq != Frequency::Daily {
        out.push(few_scenarios(r, freq));
    }
    let treated: Vec<String> = r
        .data
        .valuation
        .iter()
        .filter(|v| v.unsmoothed.is_some())
        .map(|v| v.asset.clone())
        .collect();
    if !treated.is_empty() {
        out.push(Caveat {
            title: "Unsmoothed valuations".into(),
            text: format!(
                "{} {} unsmoothed with Geltner's method (ρ in appendix B). The unsmoothed series estimates the market value that appraisals follow with a lag; its volatility and tail rest on ρ, itself an estimate with the standard error shown. The walk-forward backtest and the historical stress windows use the ρ of the current scenario window in every month, a look-ahead in the smoothing parameter only.",
                format::shortlist(&treated, 6),
                if treated.len() == 1 { "is" } else { "are" }
            ),
        });
    }
    out
}

/// How few scenarios month-end (quarter-end) observations give, and what that does to CVaR at 95% and
/// above: the tail average rests on a handful of periods.
fn few_scenarios(r: &RunResult, freq: Frequency) -> Caveat {
    let s = r.scenarios.len();
    let tails: Vec<String> = r
        .config
        .levels
        .iter()
        .filter(|&&c| c >= 0.95)
        .map(|&c| {
            let k = ((1.0 - c) * s as f64).ceil() as usize;
            format!("{} at {}", format::count(k), format::level(c))
        })
        .collect();
    let period = freq.period();
    let tail = if tails.is_empty() {
        String::new()
    } else {
        format!(
            " CVaR rests on the worst {} of them: a single {period} entering or leaving the window can move it by a large share, and at 99% a few {period}s decide it alone.",
            tails.join(", ")
        )
    };
    Caveat {
        title: format!("Few {} scenarios", freq.word()),
        text: format!(
            "Scenarios are built on {period}-end observations (scenarios.frequency: {}): the {}-year look-back gives {} scenarios, where daily prices would give about {} times as many (21 business days a month).{tail} Read tail figures at 95% and above as rough.",
            freq.word(),
            r.config.scenarios.lookback_years,
            format::count(s),
            if freq == Frequency::Quarterly { 63 } else { 21 }
        ),
    }
}
