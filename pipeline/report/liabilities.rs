//! "Liabilities and funded status": the display data of the liabilities page (`liabilities` in
//! `/data/report.json`) — the liabilities' facts (present value, funded ratio, proxy, duration, basis),
//! each portfolio's surplus risk, hedge ratio and funded ratio at the discount rate ±1 pp, and the funded
//! ratio after each stress shock — with the summary's key point about them. Without liabilities the page
//! is left out and the key point says none are configured.
//!
//! May read: the [`RunResult`] (its `liabilities` report and stress set), the view model
//! ([`super::view`]), [`super::format`] and [`super::money`]. Computes nothing: every figure comes from
//! `analysis::liabilities`.

use super::format::{self, NONE, Style, pct};
use super::money;
use super::view::{Head, Pair, Portfolio, pair};
use crate::analysis::liabilities::{LiabilityReport, SurplusPosition};
use crate::config::Basis;
use crate::run::RunResult;
use serde::Serialize;

/// The liabilities page as printed.
#[derive(Serialize)]
pub struct LiabilitiesShow {
    pub facts: Vec<Pair>,
    pub rows: Vec<SurplusRow>,
    /// Column heads of the stress table: the portfolios in report order.
    pub heads: Vec<Head>,
    pub stress: Vec<StressRow>,
    pub level: String,
    pub sentences: Vec<String>,
    /// The cover's line: the funded ratio and the current portfolio's surplus CVaR.
    pub cover: String,
}

/// One portfolio's surplus risk and rate sensitivity.
#[derive(Serialize)]
pub struct SurplusRow {
    pub head: Head,
    pub expected: String,
    pub volatility: String,
    pub var: String,
    pub cvar: String,
    pub cvar_money: Option<String>,
    pub funded_tail: String,
    pub hedge: String,
    pub rate_down: String,
    pub rate_up: String,
}

/// One shock: the liabilities' move and each portfolio's funded ratio after it.
#[derive(Serialize)]
pub struct StressRow {
    pub shock: String,
    pub proxy: String,
    pub funded: Vec<String>,
}

/// The page's data, or `None` without liabilities.
pub fn show(r: &RunResult, shown: &[Portfolio]) -> Option<LiabilitiesShow> {
    let l = r.liabilities.as_ref()?;
    let c = r.config.confidence;
    let positions: Vec<Option<&SurplusPosition>> =
        shown.iter().map(|v| position(l, v.key)).collect();
    Some(LiabilitiesShow {
        facts: facts(r, l),
        rows: shown
            .iter()
            .zip(&positions)
            .map(|(v, p)| surplus_row(r, v, *p, c))
            .collect(),
        heads: shown.iter().map(|v| Head::of(v.identity)).collect(),
        stress: stress_rows(r, &positions),
        level: format::level(c),
        sentences: sentences(l),
        cover: cover(l, c),
    })
}

/// "funded ratio 95.14% · current surplus CVaR 95% 5.33%" (the surplus figure only with holdings).
fn cover(l: &LiabilityReport, c: f64) -> String {
    let mut s = format!("funded ratio {}", pct(l.funded_ratio, Style::Weight));
    if let Some(p) = position(l, super::view::CURRENT) {
        s.push_str(&format!(
            " · current surplus CVaR {} {}",
            format::level(c),
            pct(p.surplus.at(c).cvar, Style::Loss)
        ));
    }
    s
}

fn position<'a>(l: &'a LiabilityReport, key: &str) -> Option<&'a SurplusPosition> {
    l.positions.iter().find(|x| x.portfolio == key)
}

fn facts(r: &RunResult, l: &LiabilityReport) -> Vec<Pair> {
    let m = money::fund(r);
    let years = |v: Option<f64>, unit: &str| {
        v.map_or(NONE.to_string(), |d| {
            format!("{} {unit}", format::number(d, 1))
        })
    };
    vec![
        pair(
            "Present value of the liabilities",
            m.map_or(format::number(l.liabilities.value, 0), |m| {
                format::money_in(l.liabilities.value, &m.currency, Style::Weight)
            }),
        ),
        pair(
            "Funded ratio (assets ÷ liabilities)",
            pct(l.funded_ratio, Style::Weight),
        ),
        pair(
            "Liability proxy (price-file series)",
            l.liabilities.proxy.clone(),
        ),
        pair(
            "Duration of the liabilities",
            years(l.liabilities.duration, "years"),
        ),
        pair(
            "Convexity of the liabilities",
            years(l.liabilities.convexity, "years²"),
        ),
        pair(
            "The models' CVaR measures",
            basis_words(l.basis).to_string(),
        ),
    ]
}

/// What the models' CVaR measures, in words.
pub fn basis_words(b: Basis) -> &'static str {
    match b {
        Basis::Assets => "the assets' loss (risk.basis: assets)",
        Basis::Surplus => "the surplus loss, assets less liabilities (risk.basis: surplus)",
    }
}

fn surplus_row(r: &RunResult, v: &Portfolio, p: Option<&SurplusPosition>, c: f64) -> SurplusRow {
    let or_none = |f: &dyn Fn(&SurplusPosition) -> Option<String>| {
        p.and_then(f).unwrap_or_else(|| NONE.to_string())
    };
    let ratio = |x: Option<f64>| x.map(|v| pct(v, Style::Weight));
    SurplusRow {
        head: Head::of(v.identity),
        expected: or_none(&|p| Some(pct(p.surplus.expected_return, Style::Return))),
        volatility: or_none(&|p| Some(pct(p.surplus.volatility, Style::Weight))),
        var: or_none(&|p| Some(pct(p.surplus.at(c).var, Style::Loss))),
        cvar: or_none(&|p| Some(pct(p.surplus.at(c).cvar, Style::Loss))),
        cvar_money: p
            .and_then(|p| money::amount(money::fund(r), p.surplus.at(c).cvar, Style::Loss)),
        funded_tail: or_none(&|p| Some(pct(p.funded_ratio_tail, Style::Weight))),
        hedge: or_none(&|p| ratio(p.hedge_ratio)),
        rate_down: or_none(&|p| ratio(p.funded_ratio_rate_down)),
        rate_up: or_none(&|p| ratio(p.funded_ratio_rate_up)),
    }
}

fn stress_rows(r: &RunResult, positions: &[Option<&SurplusPosition>]) -> Vec<StressRow> {
    r.analysis
        .shocks
        .iter()
        .enumerate()
        .map(|(k, s)| StressRow {
            shock: s.name.clone(),
            proxy: s
                .liabilities
                .map_or(NONE.to_string(), |l| pct(l, Style::Return)),
            funded: positions
                .iter()
                .map(|p| {
                    p.map_or(NONE.to_string(), |p| {
                        pct(p.stress[k].funded_ratio, Style::Weight)
                    })
                })
                .collect(),
        })
        .collect()
}

fn sentences(l: &LiabilityReport) -> Vec<String> {
    let mut out = vec![format!(
        "The assets are {} of the present value of the liabilities (the funded ratio). The liabilities' value moves with the proxy series {}; the surplus return of a portfolio in a scenario is its return less the proxy's return divided by the funded ratio, as a fraction of the assets.",
        pct(l.funded_ratio, Style::Weight),
        l.liabilities.proxy
    )];
    out.push(match l.basis {
        Basis::Surplus => "The models work on the surplus basis: their CVaR cap, return floor and ratio, and the VaR and CVaR of every portfolio elsewhere in this pack, are the surplus figures.".to_string(),
        Basis::Assets => "The models work on the assets' own loss (risk.basis: assets); the figures below are the same portfolios measured against the liabilities.".to_string(),
    });
    if l.positions.iter().all(|p| p.hedge_ratio.is_none()) {
        out.push("There is no hedge ratio and no funded ratio at the discount rate ±1 pp: they need the liabilities' duration (liabilities.duration) and asset durations (a `duration` column in the asset metadata).".to_string());
    }
    out
}

/// The summary's key point: the funded ratio and the current portfolio's surplus risk, or that no
/// liabilities are configured.
pub fn key_point(r: &RunResult) -> String {
    let Some(l) = &r.liabilities else {
        return "Liabilities: none are configured (config section `liabilities`), so this pack is asset-only: no funded ratio or surplus risk.".into();
    };
    let c = r.config.confidence;
    let mut s = format!(
        "Liabilities (section §liabilities): funded ratio {}",
        pct(l.funded_ratio, Style::Weight)
    );
    if let Some(p) = position(l, super::view::CURRENT) {
        s.push_str(&format!(
            "; the current portfolio's surplus CVaR at {} is {} of the assets",
            format::level(c),
            money::pct_and_amount(money::fund(r), p.surplus.at(c).cvar, Style::Loss)
        ));
        if let (Some(h), Some(up), Some(down)) = (
            p.hedge_ratio,
            p.funded_ratio_rate_up,
            p.funded_ratio_rate_down,
        ) {
            s.push_str(&format!(
                ", it hedges {} of the liabilities' rate sensitivity, and the funded ratio would be {} with the discount rate 1 pp lower and {} with it 1 pp higher",
                pct(h, Style::Weight),
                pct(down, Style::Weight),
                pct(up, Style::Weight)
            ));
        }
    }
    s.push_str(&format!(
        "; the models' CVaR measures {}{}.",
        basis_words(l.basis),
        match l.basis {
            Basis::Surplus => ", and so does every VaR and CVaR of a portfolio in this pack",
            Basis::Assets => "",
        }
    ));
    s
}

/// The summary's key points with the liabilities' point after the policy's.
pub fn with_key_point(mut summary: Vec<String>, r: &RunResult) -> Vec<String> {
    let at = summary
        .iter()
        .position(|s| s.starts_with("Policy:"))
        .map_or(summary.len(), |i| i + 1);
    summary.insert(at, key_point(r));
    summary
}

/// What the liability proxy leaves out, with liabilities.
pub fn caveat(r: &RunResult) -> Option<super::text::Caveat> {
    r.liabilities.as_ref()?;
    Some(super::text::Caveat {
        title: "Liabilities by proxy".into(),
        text: "The liabilities' value moves only with the proxy series: changes in actuarial assumptions, mortality and longevity, and the liabilities' own cash flows (benefits paid, contributions received) over the horizon are not captured. The funded ratio is today's, held fixed in the backtest; the funded ratio at ±1 pp uses durations (and the liabilities' convexity), a first- or second-order approximation, and counts assets without a duration as insensitive to rates.".into(),
    })
}
