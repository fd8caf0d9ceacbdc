//! Money and years beside the fractions: the amount in the fund's base currency of a fraction of its value
//! (`fund.value` × fraction, printed by [`super::format::money`]), and the annualised expected return and
//! volatility of a horizon figure, with the rule that annualises them written out for the notes.
//!
//! Without `fund.value` every amount is `None` and the pack keeps its fractions; [`absent_note`] says so
//! where the reader sees it (the summary). The number of horizons in a year is the figure the policy
//! analysis annualises tracking error with ([`crate::analysis::policy::horizons_per_year`]), so the pack
//! annualises everything by one number.
//!
//! May read: the [`RunResult`] (its config's `fund.money`, the policy report, the data) and
//! [`super::format`]. Computes only products of a fraction and the fund value or the year factor.

use super::format::{self, Style, money, money_in, pct};
use crate::config::Money;
use crate::run::RunResult;
use serde::Serialize;

/// The money and annualisation facts the templates print in notes (`money` in `/data/report.json`).
#[derive(Serialize)]
pub struct MoneyShow {
    /// The currency code, or `null` without a fund value.
    pub currency: Option<String>,
    /// The fund value with its code (`XTS 2,350,000,000`), or `null`.
    pub value: Option<String>,
    /// The sentence saying no fund value is configured, or `null` when one is.
    pub absent: Option<String>,
    /// Horizons in a year, two decimals, and its square root (the volatility factor).
    pub horizons_per_year: String,
    pub volatility_factor: String,
}

/// The money facts of a run.
pub fn show(r: &RunResult) -> MoneyShow {
    let m = r.config.fund.money.as_ref();
    let n = horizons_per_year(r);
    MoneyShow {
        currency: m.map(|m| m.currency.clone()),
        value: m.map(|m| money_in(m.value, &m.currency, Style::Weight)),
        absent: absent_note(r),
        horizons_per_year: format::number(n, 2),
        volatility_factor: format::number(n.sqrt(), 2),
    }
}

/// The sentence for a fund without `fund.value`, or `None` when it has one.
pub fn absent_note(r: &RunResult) -> Option<String> {
    r.config.fund.money.is_none().then(|| {
        "No fund value is configured (fund.value and fund.base_currency), so every figure in this pack is a fraction of the fund's value and no amount in money is shown.".to_string()
    })
}

/// The fund's value and currency, when configured.
pub fn fund(r: &RunResult) -> Option<&Money> {
    r.config.fund.money.as_ref()
}

/// The amount of `fraction` of the fund's value, digits only (the unit is in the table's note), or `None`
/// without a fund value or a figure (a non-finite fraction prints as the percentage's `n/a` alone).
pub fn amount(m: Option<&Money>, fraction: f64, style: Style) -> Option<String> {
    m.filter(|_| fraction.is_finite())
        .map(|m| money(m.value * fraction, style))
}

/// The amount of `fraction` of the fund's value with its currency code (`XTS 123,375,000`), or `None`.
pub fn amount_in(m: Option<&Money>, fraction: f64, style: Style) -> Option<String> {
    m.filter(|_| fraction.is_finite())
        .map(|m| money_in(m.value * fraction, &m.currency, style))
}

/// A percentage followed by its amount in brackets where there is one: `5.25% (XTS 123,375,000)`.
pub fn pct_and_amount(m: Option<&Money>, fraction: f64, style: Style) -> String {
    match amount_in(m, fraction, style) {
        Some(a) => format!("{} ({a})", pct(fraction, style)),
        None => pct(fraction, style),
    }
}

/// A percentage and its amount separated by a comma, for a list already in brackets: `−17.20%, XTS
/// −404,200,000`.
pub fn pct_then_amount(m: Option<&Money>, fraction: f64, style: Style) -> String {
    match amount_in(m, fraction, style) {
        Some(a) => format!("{}, {a}", pct(fraction, style)),
        None => pct(fraction, style),
    }
}

/// The number of scenario horizons in a year: the policy report's figure when there is a policy, else the
/// same function applied to the same data.
pub fn horizons_per_year(r: &RunResult) -> f64 {
    r.policy.as_ref().map_or_else(
        || crate::analysis::policy::horizons_per_year(&r.data, r.scenarios.horizon),
        |p| p.horizons_per_year,
    )
}

/// An expected return over one horizon, annualised by simple scaling: × horizons in a year (not
/// compounded). The mean of a sum of n independent, identically distributed horizon returns is n × the mean,
/// as its variance is n × the variance (the rule [`annual_volatility`] takes the root of).
pub fn annual_return(horizon_return: f64, per_year: f64) -> f64 {
    horizon_return * per_year
}

/// A volatility over one horizon, annualised by the square-root-of-time rule: × √(horizons in a year),
/// exact only for independent horizons (the rule tracking error uses on the policy page).
pub fn annual_volatility(horizon_volatility: f64, per_year: f64) -> f64 {
    horizon_volatility * per_year.sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo() -> Money {
        Money {
            value: 2_350_000_000.0,
            currency: "XTS".into(),
        }
    }

    #[test]
    fn an_amount_is_the_fund_value_times_the_fraction() {
        let m = demo();
        // 2,350,000,000 × 0.0525 = 123,375,000; × −0.0034 = −7,990,000; × 0.000123 = 289,050.
        assert_eq!(
            amount(Some(&m), 0.0525, Style::Loss).as_deref(),
            Some("123,375,000")
        );
        assert_eq!(
            amount_in(Some(&m), -0.0034, Style::Return).as_deref(),
            Some("XTS \u{2212}7,990,000")
        );
        assert_eq!(
            pct_and_amount(Some(&m), 0.000123, Style::Loss),
            "0.01% (XTS 289,050)"
        );
        assert_eq!(
            pct_then_amount(Some(&m), -0.172, Style::Return),
            "\u{2212}17.20%, XTS \u{2212}404,200,000"
        );
        assert_eq!(amount(None, 0.0525, Style::Loss), None);
        assert_eq!(amount(Some(&m), f64::NAN, Style::Loss), None);
        assert_eq!(pct_and_amount(Some(&m), f64::NAN, Style::Loss), "n/a");
        assert_eq!(pct_and_amount(None, 0.0525, Style::Loss), "5.25%");
    }

    #[test]
    fn annualising_scales_returns_by_n_and_volatility_by_its_root() {
        // 12 horizons a year: 0.5% a horizon is 6% a year (simple); 2% volatility is 2% × √12 = 6.928…%.
        assert!((annual_return(0.005, 12.0) - 0.06).abs() < 1e-15);
        assert!((annual_volatility(0.02, 12.0) - 0.02 * 12f64.sqrt()).abs() < 1e-15);
        assert!((annual_volatility(0.02, 4.0) - 0.04).abs() < 1e-15);
    }
}
