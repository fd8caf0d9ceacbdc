//! The currency part of every portfolio's risk: its exposure per foreign currency before and after
//! hedging, and the currency share of its CVaR, measured as the CVaR with and without currency moves.
//!
//! "Without currency moves" is the same portfolio on the same horizon windows with every asset at its
//! local-currency return (as if fully hedged at a zero rate differential): the scenarios are cut from the
//! local prices ingest kept (`MarketData::currency`) exactly as the run's are from the base-currency ones,
//! with the same probabilities. The share is (CVaR − CVaR without currency moves) / CVaR; it is negative
//! when the currencies lower the tail loss. It is not an Euler allocation: currency and local moves
//! interact, so the two parts need not add up to a decomposition of CVaR.
//!
//! Reads the market data and the scenario set; writes nothing.

use crate::config::Config;
use crate::ingest::MarketData;
use crate::ingest::currency::exposure;
use crate::risk::cvar_of;
use crate::scenarios::{ScenarioSet, from_prices};

/// One portfolio's currency figures.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PortfolioCurrency {
    pub portfolio: String,
    /// Per foreign currency (sorted): (code, exposure before hedging, after hedging), as fractions of the
    /// portfolio's value.
    pub exposure: Vec<(String, f64, f64)>,
    /// CVaR at the model confidence in the base currency, and without currency moves.
    pub cvar: f64,
    pub cvar_local: f64,
    /// (cvar − cvar_local) / cvar; `None` when cvar is not positive.
    pub share: Option<f64>,
}

/// The currency figures of every portfolio (`portfolios`: name and weights), or `None` when no asset of
/// the run is priced in a foreign currency.
pub fn analyse(
    cfg: &Config,
    data: &MarketData,
    set: &ScenarioSet,
    portfolios: &[(String, Vec<f64>)],
) -> Option<Vec<PortfolioCurrency>> {
    if !data.currency.any_foreign() {
        return None;
    }
    let mut local = from_prices(
        &data.assets,
        &data.dates,
        &data.currency.local_prices,
        &cfg.scenarios,
    )
    .ok()?;
    if local.len() != set.len() {
        return None;
    }
    local.probabilities.clone_from(&set.probabilities);
    let c = cfg.confidence;
    Some(
        portfolios
            .iter()
            .map(|(name, w)| {
                let (cvar, cvar_local) = (cvar_of(set, w, c), cvar_of(&local, w, c));
                PortfolioCurrency {
                    portfolio: name.clone(),
                    exposure: exposure(&data.currency, w)
                        .into_iter()
                        .map(|(k, (g, n))| (k, g, n))
                        .collect(),
                    cvar,
                    cvar_local,
                    share: (cvar > 0.0).then(|| (cvar - cvar_local) / cvar),
                }
            })
            .collect(),
    )
}
