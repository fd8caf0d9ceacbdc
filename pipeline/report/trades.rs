//! "Trades and costs": the display data of the trades section (`trades` in `/data/report.json`) — what it
//! takes to get from the current holdings to each candidate. Per model: the number of trades, the amounts
//! bought and sold, the gross traded value, turnover, the transaction cost in basis points and in money,
//! and the expected return before and after that cost; then its trade list, largest trades first, the
//! smaller ones summed into one line. Without a fund value the amounts are left out (weight changes and
//! basis points only) and a sentence says what is missing; without cost rates a sentence says the trades
//! are shown free of cost. Without current holdings, or without a model that has a portfolio, the part is
//! `null` and `trades_absent` says why in one sentence.
//!
//! May read: the [`RunResult`] (each model's `trades`, `turnover`, `cost`, `expected_return_net`, the
//! feasible set's cost rates), the view model ([`super::view`]) and [`super::format`]. Computes nothing
//! but sums for display: every trade, amount and cost comes from the run.

use super::format::{self, NONE, Style, money_in, pct};
use super::view::{Head, Portfolio};
use crate::config::Money;
use crate::run::{ModelReport, RunResult, Trade};
use serde::Serialize;

/// How many trades each model's list shows one by one; the rest are summed into one line.
pub const LISTED: usize = 10;

/// The trades section as printed.
#[derive(Serialize)]
pub struct TradesShow {
    /// The sentences under the section title: where the trades start from, the money basis, the costs.
    pub sentences: Vec<String>,
    /// Whether amounts in money are shown (a fund value is configured).
    pub money: bool,
    /// Whether cost rates are configured (a rate column and cost rows).
    pub costs: bool,
    /// The head of the amount column, with the currency: `Amount (XTS)`.
    pub amount_head: String,
    /// Column heads of the figures table: the models in report order.
    pub heads: Vec<Head>,
    /// What each model takes, one row per figure.
    pub figures: Vec<FigureRow>,
    /// Each model's trade list, in report order.
    pub lists: Vec<TradeList>,
}

/// One figure (a label) for each model.
#[derive(Serialize)]
pub struct FigureRow {
    pub label: String,
    pub cells: Vec<String>,
}

/// One model's trade list: its largest trades, then the smaller ones summed; or why there is none.
#[derive(Serialize)]
pub struct TradeList {
    pub head: Head,
    pub rows: Vec<TradeRow>,
    /// The smaller trades summed (`12 smaller trades`), when there are more than [`LISTED`] + 1.
    pub rest: Option<TradeRow>,
    /// Why the list is empty: no solution, or nothing to trade.
    pub empty: Option<String>,
}

/// One trade (or the sum of the smaller ones) as printed.
#[derive(Serialize)]
pub struct TradeRow {
    pub asset: String,
    pub name: String,
    pub class: String,
    /// The one-way cost rate in basis points (blank on the summed line).
    pub rate: String,
    pub current: String,
    pub candidate: String,
    /// The weight change in percentage points, signed.
    pub change: String,
    /// The amount bought (+) or sold (−) in the base currency; blank without a fund value.
    pub amount: String,
}

/// The section's data, or the sentence that says why there is nothing to trade.
pub fn show(r: &RunResult, shown: &[Portfolio]) -> Result<TradesShow, String> {
    let Some(current) = r.data.holdings.as_deref() else {
        return Err("No current holdings were given (data.holdings), so there are no trades to get from them to a candidate and no transaction costs.".into());
    };
    let models: Vec<&ModelReport> = shown.iter().filter_map(|v| v.model).collect();
    if models.iter().all(|m| m.trades.is_none()) {
        return Err(
            "No model has a portfolio, so there are no trades from the current holdings to show."
                .into(),
        );
    }
    let money = r.config.fund.money.as_ref();
    let costs = r.feasible.charges_costs();
    let cells = |f: &dyn Fn(&ModelReport, &[Trade]) -> String| -> Vec<String> {
        models
            .iter()
            .map(|m| m.trades.as_deref().map_or(NONE.into(), |t| f(m, t)))
            .collect()
    };
    Ok(TradesShow {
        sentences: sentences(money, costs),
        money: money.is_some(),
        costs,
        amount_head: money.map_or(String::new(), |m| format!("Amount ({})", m.currency)),
        heads: shown
            .iter()
            .filter(|v| v.model.is_some())
            .map(|v| Head::of(v.identity))
            .collect(),
        figures: figures(money, costs, &cells),
        lists: models.iter().map(|m| list(r, m, current, costs)).collect(),
    })
}

/// Where the trades start, the money basis (or what is missing for it) and how costs are charged.
fn sentences(money: Option<&Money>, costs: bool) -> Vec<String> {
    let mut out = vec![
        "Each candidate is reached from the current holdings at the as-of date: a trade is the change of one asset's weight; assets whose weight does not change are not traded and not listed.".to_string(),
    ];
    out.push(match money {
        Some(m) => format!(
            "Amounts are in {} at the fund's value of {}: amount = value × weight change, positive when bought, negative when sold.",
            m.currency,
            money_in(m.value, &m.currency, Style::Weight)
        ),
        None => "No fund value is configured, so trades are shown as weight changes and costs in basis points only; amounts in money need `fund.value` and `fund.base_currency` in the config.".into(),
    });
    out.push(if costs {
        "Transaction costs are charged at each asset's one-way rate (config section `costs`) on the amount bought or sold: cost = Σ rate × |weight change| × value. The models work net of this cost.".into()
    } else {
        "No transaction cost rates are configured (config section `costs`), so the trades are shown free of cost and the expected returns are before costs.".into()
    });
    out
}

/// Basis points of the fund's value with one decimal: 0.000535 → `5.4 bps`.
fn bps(x: f64) -> String {
    format!("{} bps", format::number(x * 1e4, 1))
}

/// The amounts bought and sold (each summed over the trades, sold as a positive figure).
fn bought_sold(t: &[Trade]) -> (f64, f64) {
    let sum = |buy: bool| -> f64 {
        t.iter()
            .filter_map(|x| x.amount)
            .filter(|a| (*a > 0.0) == buy)
            .map(f64::abs)
            .sum()
    };
    (sum(true), sum(false))
}

/// `12: 7 bought, 5 sold`.
fn count(t: &[Trade]) -> String {
    let bought = t.iter().filter(|x| x.change > 0.0).count();
    format!("{}: {} bought, {} sold", t.len(), bought, t.len() - bought)
}

type Cells<'a> = dyn Fn(&dyn Fn(&ModelReport, &[Trade]) -> String) -> Vec<String> + 'a;

/// The rows of the figures table: trades, money traded, turnover, cost, expected return gross and net.
fn figures(money: Option<&Money>, costs: bool, cells: &Cells) -> Vec<FigureRow> {
    let row = |label: &str, f: &dyn Fn(&ModelReport, &[Trade]) -> String| FigureRow {
        label: label.into(),
        cells: cells(f),
    };
    let mut out = vec![row("Number of trades", &|_, t| count(t))];
    if let Some(m) = money {
        let c = m.currency.as_str();
        out.push(row("Bought", &|_, t| {
            money_in(bought_sold(t).0, c, Style::Weight)
        }));
        out.push(row("Sold", &|_, t| {
            money_in(bought_sold(t).1, c, Style::Weight)
        }));
        out.push(row("Gross traded value (bought + sold)", &|_, t| {
            let (b, s) = bought_sold(t);
            money_in(b + s, c, Style::Weight)
        }));
    }
    out.push(row("Turnover Σ|weight change|", &|m, _| {
        m.turnover.map_or(NONE.into(), |x| pct(x, Style::Weight))
    }));
    if costs {
        out.push(row(
            "Transaction cost (basis points of the fund)",
            &|m, _| m.cost.map_or(NONE.into(), bps),
        ));
        if let Some(v) = money {
            out.push(row("Transaction cost in money", &|m, _| {
                m.cost.map_or(NONE.into(), |x| {
                    money_in(x * v.value, &v.currency, Style::Weight)
                })
            }));
        }
    }
    let gross = if costs {
        "Expected return before costs"
    } else {
        "Expected return (no costs)"
    };
    out.push(row(gross, &|m, _| {
        m.profile
            .as_ref()
            .map_or(NONE.into(), |p| pct(p.expected_return, Style::Return))
    }));
    if costs {
        out.push(row("Expected return net of costs", &|m, _| {
            m.expected_return_net
                .map_or(NONE.into(), |x| pct(x, Style::Return))
        }));
    }
    out
}

/// The trades in print order: largest first by absolute weight change (the same order as by amount, the
/// value being positive), ties in asset order. Changes are compared at 1e-12, below any printed figure, so
/// solver round-off does not decide between equal trades.
fn in_print_order(t: &[Trade]) -> Vec<&Trade> {
    let key = |x: &Trade| (x.change.abs() * 1e12).round();
    let mut out: Vec<&Trade> = t.iter().collect();
    out.sort_by(|a, b| key(b).total_cmp(&key(a)).then(a.asset.cmp(&b.asset)));
    out
}

fn list(r: &RunResult, m: &ModelReport, current: &[f64], costs: bool) -> TradeList {
    let head = Head::of(super::view::identity(m.name));
    let empty = |why: &str| TradeList {
        head: Head::of(super::view::identity(m.name)),
        rows: vec![],
        rest: None,
        empty: Some(why.into()),
    };
    let (Some(trades), Some(x)) = (m.trades.as_deref(), m.outcome.weights.as_deref()) else {
        return empty("The model has no solution, so there is nothing to trade.");
    };
    if trades.is_empty() {
        return empty("The model's portfolio is the current holdings: nothing to trade.");
    }
    let order = in_print_order(trades);
    let listed = if order.len() > LISTED + 1 {
        LISTED
    } else {
        order.len()
    };
    let (top, rest) = order.split_at(listed);
    TradeList {
        head,
        rows: top
            .iter()
            .map(|t| trade_row(r, t, (current, x), costs))
            .collect(),
        rest: (!rest.is_empty()).then(|| rest_row(rest, current, x)),
        empty: None,
    }
}

/// One trade's row; `(current, x)` are the current holdings and the model's weights.
fn trade_row(r: &RunResult, t: &Trade, (current, x): (&[f64], &[f64]), costs: bool) -> TradeRow {
    let i = t.asset;
    let rate = r.feasible.cost_rates.get(i).copied().unwrap_or(0.0);
    TradeRow {
        asset: r.data.assets[i].clone(),
        name: name(r, i),
        class: format::title(&r.data.meta[i].class),
        rate: if costs {
            format::number(rate * 1e4, 1)
        } else {
            String::new()
        },
        current: format::weight(current[i]),
        candidate: format::weight(x[i]),
        change: pct(t.change, Style::Points),
        amount: t
            .amount
            .map_or(String::new(), |a| format::money(a, Style::Return)),
    }
}

/// An asset's name, blank when the metadata gives none (it then repeats the code).
fn name(r: &RunResult, i: usize) -> String {
    let n = &r.data.meta[i].name;
    if *n == r.data.assets[i] {
        String::new()
    } else {
        n.clone()
    }
}

/// The smaller trades summed: weights, changes and amounts (purchases and sales netted).
fn rest_row(rest: &[&Trade], current: &[f64], x: &[f64]) -> TradeRow {
    let cur: f64 = rest.iter().map(|t| current[t.asset]).sum();
    let new: f64 = rest.iter().map(|t| x[t.asset]).sum();
    let change: f64 = rest.iter().map(|t| t.change).sum();
    let amount: Option<f64> = rest.iter().map(|t| t.amount).sum();
    TradeRow {
        asset: format!("{} smaller trades", rest.len()),
        name: String::new(),
        class: String::new(),
        rate: String::new(),
        current: pct(cur, Style::Weight),
        candidate: pct(new, Style::Weight),
        change: pct(change, Style::Points),
        amount: amount.map_or(String::new(), |a| format::money(a, Style::Return)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn trade(asset: usize, change: f64, amount: f64) -> Trade {
        Trade {
            asset,
            change,
            amount: Some(amount),
        }
    }

    #[test]
    fn largest_trades_come_first_and_round_off_does_not_break_ties() {
        let t = [
            trade(0, 0.01, 10.0),
            trade(1, -0.05, -50.0),
            trade(2, 0.045 + 1e-16, 45.0),
            trade(3, 0.045, 45.0),
            trade(4, -0.02, -20.0),
        ];
        let order: Vec<usize> = in_print_order(&t).iter().map(|x| x.asset).collect();
        assert_eq!(order, [1, 2, 3, 4, 0]);
    }

    #[test]
    fn the_summed_line_nets_purchases_and_sales() {
        let t = [trade(0, 0.02, 20.0), trade(1, -0.03, -30.0)];
        let row = rest_row(&[&t[0], &t[1]], &[0.1, 0.2], &[0.12, 0.17]);
        assert_eq!(row.asset, "2 smaller trades");
        assert_eq!(row.change, "\u{2212}1.00 pp");
        assert_eq!(row.amount, "\u{2212}10");
        assert_eq!(
            (row.current.as_str(), row.candidate.as_str()),
            ("30.00%", "29.00%")
        );
    }

    #[test]
    fn bought_and_sold_are_summed_apart() {
        let t = [
            trade(0, 0.02, 20.0),
            trade(1, -0.03, -30.0),
            trade(2, 0.01, 10.0),
        ];
        assert_eq!(bought_sold(&t), (30.0, 30.0));
        assert_eq!(count(&t), "3: 2 bought, 1 sold");
    }
}
