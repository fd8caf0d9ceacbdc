//! The currency parts of the pack: in "Tail loss", every portfolio's exposure per foreign currency before
//! and after hedging and its CVaR with and without currency moves (`currency` in `/data/report.json`); in
//! appendix B, one row per currency with its assets, hedge ratios, rate differential and rate at as-of.
//! Without an asset priced in a foreign currency the part is `null` and `currency_absent` says so.
//!
//! May read: the [`RunResult`] (its market data's currencies, `analysis::currency`), the view model
//! ([`super::view`]) and [`super::format`]. Computes nothing but sums of hedge ratios for the table.

use super::format::{self, NONE, Style, pct};
use super::view::{Head, Portfolio};
use crate::run::RunResult;
use serde::Serialize;

/// The currency subsection and table as printed.
#[derive(Serialize)]
pub struct CurrencyShow {
    pub base: String,
    /// The foreign currencies, sorted: the exposure table's rows.
    pub currencies: Vec<String>,
    /// Column heads: the portfolios in report order.
    pub heads: Vec<Head>,
    /// Per currency, per portfolio: "before / after" hedging.
    pub exposure: Vec<Vec<ExposureCell>>,
    /// Per portfolio: CVaR, CVaR without currency moves, currency share.
    pub cvar: Vec<String>,
    pub cvar_local: Vec<String>,
    pub share: Vec<String>,
    pub level: String,
    /// Appendix B: one row per foreign currency.
    pub table: Vec<CurrencyRow>,
}

/// One currency's exposure in one portfolio.
#[derive(Serialize)]
pub struct ExposureCell {
    pub before: String,
    pub after: String,
}

/// One row of appendix B's currency table.
#[derive(Serialize)]
pub struct CurrencyRow {
    pub code: String,
    pub assets: String,
    pub hedge: String,
    pub differential: String,
}

/// The currency parts, or why there are none.
pub fn show(r: &RunResult, shown: &[Portfolio]) -> Result<CurrencyShow, String> {
    if r.scenarios.from_file() {
        return Err(super::text::from_file_absent(
            r,
            "The currency split of CVaR",
        ));
    }
    let (Some(rows), Some(base)) = (&r.analysis.currency, &r.config.currency.base) else {
        return Err("Every asset is priced in the fund's base currency, so there is no currency exposure to show.".into());
    };
    let currencies = r.data.currency.foreign();
    let of = |v: &Portfolio| rows.iter().find(|p| p.portfolio == v.key);
    let fig = |v: &Portfolio,
               f: fn(&crate::analysis::currency::PortfolioCurrency) -> Option<f64>,
               s| { of(v).and_then(f).map_or(NONE.to_string(), |x| pct(x, s)) };
    let exposure = currencies
        .iter()
        .map(|c| {
            shown
                .iter()
                .map(
                    |v| match of(v).and_then(|p| p.exposure.iter().find(|e| &e.0 == c)) {
                        Some((_, g, n)) => ExposureCell {
                            before: format::weight(*g),
                            after: format::weight(*n),
                        },
                        None => ExposureCell {
                            before: NONE.into(),
                            after: NONE.into(),
                        },
                    },
                )
                .collect()
        })
        .collect();
    Ok(CurrencyShow {
        base: base.clone(),
        heads: shown.iter().map(|v| Head::of(v.identity)).collect(),
        exposure,
        cvar: shown
            .iter()
            .map(|v| fig(v, |p| Some(p.cvar), Style::Loss))
            .collect(),
        cvar_local: shown
            .iter()
            .map(|v| fig(v, |p| Some(p.cvar_local), Style::Loss))
            .collect(),
        share: shown
            .iter()
            .map(|v| fig(v, |p| p.share, Style::Return))
            .collect(),
        level: format::level(r.config.confidence),
        table: currencies.iter().map(|c| row(r, c)).collect(),
        currencies,
    })
}

/// A currency's assets (count), their hedge ratios (one figure, or the range) and its rate differential.
fn row(r: &RunResult, c: &str) -> CurrencyRow {
    let cur = &r.data.currency;
    let ratios: Vec<f64> = cur
        .of_asset
        .iter()
        .zip(&cur.hedge)
        .filter(|(of, _)| of.as_deref() == Some(c))
        .map(|(_, h)| *h)
        .collect();
    let (lo, hi) = ratios
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &h| {
            (a.min(h), b.max(h))
        });
    let hedge = if (hi - lo).abs() < 1e-12 {
        pct(lo, Style::Weight)
    } else {
        format!("{}–{}", pct(lo, Style::Weight), pct(hi, Style::Weight))
    };
    let d = r
        .config
        .currency
        .rate_differential
        .get(c)
        .copied()
        .unwrap_or(0.0);
    CurrencyRow {
        code: c.to_string(),
        assets: format::count(ratios.len()),
        hedge,
        differential: pct(d, Style::Return),
    }
}
