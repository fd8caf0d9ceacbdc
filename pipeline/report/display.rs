//! The display model: everything the templates print, handed to typst as `/data/report.json`. Every figure
//! is already formatted by [`super::format`], every list already in print order, so templates only lay out.
//!
//! Reads the run's results ([`RunResult`]) through the view model ([`super::view`]) and the `results.json`
//! document (for the input digests); computes nothing new beyond sums for display (weights by class and
//! group) and each portfolio's return per unit of CVaR. The sentences come from [`super::text`], the
//! "Further analysis" part from [`super::further`].

use super::change::ChangeShow;
use super::format::{self, NONE, Style, pct};
use super::further::{self, Further};
use super::money::{self, MoneyShow};
use super::policy::{self, PolicyShow};
use super::text::{self, Caveat};
use super::trades::{self, TradesShow};
use super::view::{Pair, Portfolio, class_order, class_sum, pair, status_word};
use crate::diag::Level;
use crate::risk::RiskProfile;
use crate::run::RunResult;
use serde::Serialize;
use serde_json::Value;

/// Everything the templates print.
#[derive(Serialize)]
pub struct Report {
    pub meta: Meta,
    pub portfolios: Vec<PortfolioRow>,
    pub levels: Vec<String>,
    pub summary: Vec<String>,
    pub classes: Vec<ClassRow>,
    pub assets: Vec<AssetRow>,
    /// With a universe larger than [`MAX_ASSET_ROWS`]: the sentence saying which assets the table leaves
    /// out (`null` when every asset is listed).
    pub assets_left_out: Option<String>,
    pub groups: Vec<GroupRow>,
    pub limits: Vec<Pair>,
    pub contributors: Vec<Contributor>,
    /// The portfolio whose contributions rank the contributors table.
    pub contributors_basis: String,
    pub checks: Checks,
    pub caveats: Vec<Caveat>,
    pub scenarios: Vec<Pair>,
    pub quality: Quality,
    /// Appendix B's valuation and unsmoothing table; `null` when every asset is valued daily and none is
    /// unsmoothed.
    pub unsmoothing: Option<super::valuation::Unsmoothing>,
    /// The method appendix's paragraph on month-end sampling and unsmoothing, when either applies.
    pub valuation_method: Option<String>,
    pub inputs: Vec<Input>,
    pub run: Vec<Pair>,
    /// The "Further analysis" section: efficient frontier, stress set, backtest.
    pub further: Further,
    /// "Position against policy", or `null` with `policy_absent` saying no policy is configured.
    pub policy: Option<PolicyShow>,
    pub policy_absent: Option<String>,
    /// "Trades and costs", or `null` with `trades_absent` saying why there is nothing to trade.
    pub trades: Option<TradesShow>,
    pub trades_absent: Option<String>,
    /// The fund value and currency of the money lines, the annualisation rule, or why there is no money.
    pub money: MoneyShow,
    /// "Since the last pack", or `null` with `change_absent` saying why there is nothing to compare.
    pub change: Option<ChangeShow>,
    pub change_absent: Option<String>,
    /// The currency subsection of "Tail loss" and appendix B's currency table, or `null` with
    /// `currency_absent` saying every asset is in the base currency.
    pub currency: Option<super::currency::CurrencyShow>,
    pub currency_absent: Option<String>,
    /// "Liabilities and funded status", or `null` without liabilities (the summary says none are
    /// configured).
    pub liabilities: Option<super::liabilities::LiabilitiesShow>,
}

/// Cover and running-header facts.
#[derive(Serialize)]
pub struct Meta {
    pub fund: String,
    pub short_name: String,
    pub as_of: String,
    pub as_of_long: String,
    pub prepared_for: Option<String>,
    pub prepared_by: Option<String>,
    /// DRAFT, or FINAL in the PDF that `finalize` renders after every role has signed.
    pub status: String,
    /// True in the final PDF.
    pub is_final: bool,
    /// Sign-off rows: role title, name, UTC time and key fingerprint (blank until signed).
    pub signoff: Vec<Value>,
    pub pack_id: String,
    pub pack_id_short: String,
    pub tool: String,
    pub confidence: String,
    pub tail: String,
    pub horizon: String,
    pub horizon_n: usize,
    pub step: usize,
    pub assets: String,
    pub scenarios: String,
    /// How the tables name the models' risk measures: `VaR`/`CVaR`, or `Surplus VaR`/`Surplus CVaR` on
    /// the surplus basis (`risk.basis: surplus`), where every portfolio's VaR and CVaR are surplus figures.
    pub var_word: &'static str,
    pub cvar_word: &'static str,
    /// A sentence for the notes under risk tables on the surplus basis (empty on the assets' basis).
    pub basis_note: &'static str,
    /// Whether the models work on the surplus loss (`risk.basis: surplus`).
    pub surplus: bool,
    /// The scenario file's name when the scenarios come from one (`data.scenarios`), else `null`.
    pub scenario_file: Option<String>,
}

/// One portfolio's line in the summary and tail tables.
#[derive(Serialize)]
pub struct PortfolioRow {
    pub key: &'static str,
    pub label: &'static str,
    pub aim: &'static str,
    pub colour: String,
    pub marker: &'static str,
    pub solved: bool,
    pub status: String,
    pub message: Option<String>,
    pub expected_return: String,
    pub var: String,
    pub cvar: String,
    pub ratio: String,
    pub volatility: String,
    pub worst_loss: String,
    pub worst_window: String,
    pub turnover: String,
    pub effective_holdings: String,
    /// The largest loss over the stress set (unsigned, a loss) and the shock that causes it.
    pub worst_stress: String,
    pub worst_stress_shock: String,
    pub at_upper: String,
    pub tails: Vec<TailCell>,
    /// The amounts in the base currency (digits only, `null` without a fund value) of VaR, CVaR, the
    /// worst scenario loss and the worst stress loss.
    pub var_money: Option<String>,
    pub cvar_money: Option<String>,
    pub worst_loss_money: Option<String>,
    pub worst_stress_money: Option<String>,
    /// Expected return and volatility annualised ([`money::annual_return`], [`money::annual_volatility`]).
    pub expected_return_annual: String,
    pub volatility_annual: String,
}

/// VaR and CVaR at one level.
#[derive(Serialize)]
pub struct TailCell {
    pub level: String,
    pub var: String,
    pub cvar: String,
    /// The same in the base currency, digits only; `null` without a fund value or a portfolio.
    pub var_money: Option<String>,
    pub cvar_money: Option<String>,
}

/// Weights and CVaR contribution of one asset class, one cell per portfolio.
#[derive(Serialize)]
pub struct ClassRow {
    pub class: String,
    pub weights: Vec<String>,
    pub contributions: Vec<String>,
    /// The contributions in the base currency, digits only; `null` without a fund value or a portfolio.
    pub contributions_money: Vec<Option<String>>,
}

/// One asset's bounds and weights, one weight per portfolio.
#[derive(Serialize)]
pub struct AssetRow {
    pub asset: String,
    pub name: String,
    pub class: String,
    pub bounds: String,
    pub weights: Vec<String>,
}

/// A group limit and each portfolio's exposure to it.
#[derive(Serialize)]
pub struct GroupRow {
    pub name: String,
    pub members: String,
    pub range: String,
    pub exposures: Vec<String>,
}

/// An asset among the largest CVaR contributors.
#[derive(Serialize)]
pub struct Contributor {
    pub asset: String,
    pub class: String,
    pub contributions: Vec<String>,
    /// The same in the base currency, digits only (`null` without a fund value or a portfolio).
    pub contributions_money: Vec<Option<String>>,
}

/// The checks table with its tally.
#[derive(Serialize)]
pub struct Checks {
    pub pass: usize,
    pub warn: usize,
    pub fail: usize,
    pub rows: Vec<CheckRow>,
}

/// One check as printed.
#[derive(Serialize)]
pub struct CheckRow {
    pub id: String,
    pub level: &'static str,
    pub message: String,
}

/// The data-quality appendix.
#[derive(Serialize)]
pub struct Quality {
    pub facts: Vec<Pair>,
    pub clean: String,
    pub rows: Vec<QualityRow>,
}

/// An asset with at least one data-quality finding.
#[derive(Serialize)]
pub struct QualityRow {
    pub asset: String,
    pub missing: String,
    pub filled: String,
    pub longest_gap: String,
    pub stale: String,
    pub extreme: String,
    pub status: &'static str,
}

/// An input file and its digest.
#[derive(Serialize)]
pub struct Input {
    pub role: String,
    pub path: String,
    pub bytes: String,
    pub sha256: String,
}

/// Builds the display data of one run; `shown` are its portfolios ([`super::view::portfolios`]).
pub fn build(r: &RunResult, shown: &[Portfolio], results: &Value, pack_id: &str) -> Report {
    let (policy, policy_absent) = match policy::show(r, shown) {
        Ok(p) => (Some(p), None),
        Err(why) => (None, Some(why)),
    };
    let (trades, trades_absent) = match trades::show(r, shown) {
        Ok(t) => (Some(t), None),
        Err(why) => (None, Some(why)),
    };
    let (currency, currency_absent) = match super::currency::show(r, shown) {
        Ok(c) => (Some(c), None),
        Err(why) => (None, Some(why)),
    };
    let (change, change_absent) = match super::change::show(results) {
        Ok(c) => (Some(c), None),
        Err(why) => (None, Some(why)),
    };
    Report {
        meta: meta(r, results, pack_id),
        portfolios: shown.iter().map(|v| portfolio_row(r, v)).collect(),
        levels: r.config.levels.iter().map(|&c| format::level(c)).collect(),
        summary: super::liabilities::with_key_point(
            text::summary(r, shown, change_absent.as_deref()),
            r,
        ),
        classes: classes(r, shown),
        assets: assets(r, shown),
        assets_left_out: assets_left_out(r, shown),
        groups: groups(r, shown),
        limits: limits(r),
        contributors: contributors(r, shown, 10),
        contributors_basis: shown
            .iter()
            .find(|v| v.profile.is_some())
            .map_or(String::new(), |v| v.identity.label.to_string()),
        checks: checks(r),
        caveats: text::caveats(r, shown)
            .into_iter()
            .chain(further::bands::caveats(r))
            .chain(super::valuation::caveats(r))
            .chain(super::liabilities::caveat(r))
            .collect(),
        scenarios: scenarios(r),
        quality: quality(r),
        unsmoothing: super::valuation::show(r),
        valuation_method: super::valuation::method(r),
        inputs: inputs(results),
        run: run_facts(r, pack_id, results["signoff"]["status"] == "FINAL"),
        further: further::build(r, shown),
        policy,
        policy_absent,
        trades,
        trades_absent,
        money: money::show(r),
        change,
        change_absent,
        currency,
        currency_absent,
        liabilities: super::liabilities::show(r, shown),
    }
}

/// The first 12 hex digits of the pack id: enough to tell packs apart on a page footer.
pub fn short_id(pack_id: &str) -> String {
    pack_id.chars().take(12).collect()
}

fn meta(r: &RunResult, results: &Value, pack_id: &str) -> Meta {
    let c = &r.config;
    Meta {
        fund: c.fund.name.clone(),
        short_name: c.short_name.clone(),
        as_of: r.data.as_of.to_string(),
        as_of_long: format::long_date(r.data.as_of),
        prepared_for: c.fund.prepared_for.clone(),
        prepared_by: c.fund.prepared_by.clone(),
        status: results["signoff"]["status"]
            .as_str()
            .unwrap_or("DRAFT")
            .to_string(),
        is_final: results["signoff"]["status"] == "FINAL",
        signoff: results["signoff"]["roles"]
            .as_array()
            .cloned()
            .unwrap_or_default(),
        pack_id: pack_id.into(),
        pack_id_short: short_id(pack_id),
        tool: format!("tailpack {}", env!("CARGO_PKG_VERSION")),
        confidence: format::level(c.confidence),
        tail: format::level(1.0 - c.confidence),
        horizon: r.data.frequency.span(r.scenarios.horizon),
        horizon_n: r.scenarios.horizon,
        step: r.scenarios.step,
        assets: format::count(r.data.assets.len()),
        scenarios: format::count(r.scenarios.len()),
        scenario_file: r
            .scenarios
            .from_file()
            .then(|| r.config.scenario_name.clone().unwrap_or_default()),
        var_word: surplus_word(c.basis, "VaR", "Surplus VaR"),
        cvar_word: surplus_word(c.basis, "CVaR", "Surplus CVaR"),
        basis_note: surplus_word(c.basis, "", SURPLUS_NOTE),
        surplus: c.basis == crate::config::Basis::Surplus,
    }
}

/// The note the risk tables carry on the surplus basis.
const SURPLUS_NOTE: &str = "On the surplus basis (risk.basis: surplus) VaR and CVaR are those of the surplus loss: the assets' loss plus the liabilities' change over the funded ratio, as a fraction of the assets (section §liabilities).";

fn surplus_word(
    basis: crate::config::Basis,
    assets: &'static str,
    surplus: &'static str,
) -> &'static str {
    match basis {
        crate::config::Basis::Assets => assets,
        crate::config::Basis::Surplus => surplus,
    }
}

/// Expected return per unit of CVaR at the model level; defined only for a positive CVaR.
fn ratio(p: &RiskProfile, c: f64) -> String {
    let cvar = p.at(c).cvar;
    if cvar > 0.0 {
        format::number(p.expected_return / cvar, 4)
    } else {
        "n/a".into()
    }
}

fn portfolio_row(r: &RunResult, v: &Portfolio) -> PortfolioRow {
    let c = r.config.confidence;
    let f = |g: &dyn Fn(&RiskProfile) -> String| v.profile.map_or(NONE.to_string(), g);
    let model = v.model;
    let stress = further::stress::worst_stress(r, v.key);
    let per_year = money::horizons_per_year(r);
    PortfolioRow {
        key: v.key,
        label: v.identity.label,
        aim: v.identity.aim,
        colour: v.identity.hex(),
        marker: v.identity.marker.name(),
        solved: v.profile.is_some(),
        status: status_word(v),
        message: model.and_then(|m| m.outcome.message.clone()),
        expected_return: f(&|p| pct(p.expected_return, Style::Return)),
        var: f(&|p| pct(p.at(c).var, Style::Loss)),
        cvar: f(&|p| pct(p.at(c).cvar, Style::Loss)),
        ratio: f(&|p| ratio(p, c)),
        volatility: f(&|p| pct(p.volatility, Style::Weight)),
        worst_loss: f(&|p| pct(p.worst_loss, Style::Loss)),
        worst_window: f(&|p| format::window(&p.worst_scenario)),
        turnover: model
            .and_then(|m| m.turnover)
            .map_or(NONE.into(), |t| pct(t, Style::Weight)),
        effective_holdings: f(&|p| format::number(p.effective_holdings, 1)),
        worst_stress: stress.map_or(NONE.into(), |(loss, _)| pct(loss, Style::Loss)),
        worst_stress_shock: stress.map_or(NONE.into(), |(_, shock)| shock.to_string()),
        at_upper: model
            .filter(|_| v.profile.is_some())
            .map_or(NONE.into(), |m| m.at_upper.len().to_string()),
        tails: tail_cells(r, v),
        var_money: loss_money(r, v, |p| p.at(c).var),
        cvar_money: loss_money(r, v, |p| p.at(c).cvar),
        worst_loss_money: loss_money(r, v, |p| p.worst_loss),
        worst_stress_money: stress
            .and_then(|(loss, _)| money::amount(money::fund(r), loss, Style::Loss)),
        expected_return_annual: f(&|p| {
            pct(
                money::annual_return(p.expected_return, per_year),
                Style::Return,
            )
        }),
        volatility_annual: f(&|p| {
            pct(
                money::annual_volatility(p.volatility, per_year),
                Style::Weight,
            )
        }),
    }
}

/// VaR and CVaR of a portfolio at every level, with their amounts.
fn tail_cells(r: &RunResult, v: &Portfolio) -> Vec<TailCell> {
    let f = |g: &dyn Fn(&RiskProfile) -> String| v.profile.map_or(NONE.to_string(), g);
    r.config
        .levels
        .iter()
        .map(|&l| TailCell {
            level: format::level(l),
            var: f(&|p| pct(p.at(l).var, Style::Loss)),
            cvar: f(&|p| pct(p.at(l).cvar, Style::Loss)),
            var_money: loss_money(r, v, |p| p.at(l).var),
            cvar_money: loss_money(r, v, |p| p.at(l).cvar),
        })
        .collect()
}

/// A loss of a portfolio's risk profile in the base currency, digits only; `None` without a fund value or
/// a profile.
fn loss_money(r: &RunResult, v: &Portfolio, loss: impl Fn(&RiskProfile) -> f64) -> Option<String> {
    money::amount(money::fund(r), loss(v.profile?), Style::Loss)
}

fn classes(r: &RunResult, shown: &[Portfolio]) -> Vec<ClassRow> {
    class_order(r)
        .into_iter()
        .map(|class| ClassRow {
            weights: shown
                .iter()
                .map(|v| {
                    v.weights
                        .map_or(NONE.into(), |w| format::weight(class_sum(r, w, &class)))
                })
                .collect(),
            contributions: shown
                .iter()
                .map(|v| {
                    v.profile.map_or(NONE.into(), |p| {
                        pct(class_sum(r, &p.component_cvar, &class), Style::Loss)
                    })
                })
                .collect(),
            contributions_money: shown
                .iter()
                .map(|v| loss_money(r, v, |p| class_sum(r, &p.component_cvar, &class)))
                .collect(),
            class: format::title(&class),
        })
        .collect()
}

fn bounds(r: &RunResult, i: usize) -> String {
    let (lo, hi) = (r.feasible.lower[i], r.feasible.upper[i]);
    if hi == 0.0 && r.config.exclude.contains(&r.data.assets[i]) {
        return "excluded".into();
    }
    format!(
        "{}\u{2013}{}",
        pct(lo, Style::Weight),
        pct(hi, Style::Weight)
    )
}

/// Most rows of the "Weights by asset" table: a universe of thousands of assets (a scenario file's) would
/// fill dozens of pages, mostly with zero weights, so beyond this the table lists the assets with the
/// largest weight in any portfolio shown and says how many it leaves out (weights.csv lists every one).
pub const MAX_ASSET_ROWS: usize = 250;

/// The assets the table lists, in universe order: all of them, or the [`MAX_ASSET_ROWS`] with the largest
/// weight in any model's portfolio (ties by the weight in any portfolio shown, then the earlier asset).
fn listed_assets(r: &RunResult, shown: &[Portfolio]) -> Vec<usize> {
    let n = r.data.assets.len();
    if n <= MAX_ASSET_ROWS {
        return (0..n).collect();
    }
    // The models' weights first (the candidates are what the committee decides on), then any portfolio's.
    let largest = |i: usize, models_only: bool| {
        shown
            .iter()
            .filter(|v| !models_only || v.model.is_some())
            .filter_map(|v| v.weights)
            .map(|w| w[i])
            .fold(0.0, f64::max)
    };
    let mut order: Vec<(usize, f64, f64)> = (0..n)
        .map(|i| (i, largest(i, true), largest(i, false)))
        .collect();
    order.sort_by(|a, b| {
        b.1.total_cmp(&a.1)
            .then(b.2.total_cmp(&a.2))
            .then(a.0.cmp(&b.0))
    });
    let mut keep: Vec<usize> = order[..MAX_ASSET_ROWS].iter().map(|(i, ..)| *i).collect();
    keep.sort_unstable();
    keep
}

/// What the "Weights by asset" table leaves out, when it leaves any out.
fn assets_left_out(r: &RunResult, shown: &[Portfolio]) -> Option<String> {
    let n = r.data.assets.len();
    if n <= MAX_ASSET_ROWS {
        return None;
    }
    let listed = listed_assets(r, shown);
    let below = (0..n)
        .filter(|i| !listed.contains(i))
        .flat_map(|i| shown.iter().filter_map(|v| v.weights).map(move |w| w[i]))
        .fold(0.0, f64::max);
    Some(format!(
        "The table lists the {} assets with the largest weight in any candidate portfolio, of {} in the universe; each of the other {} weighs at most {} in every portfolio shown. weights.csv in the pack lists every asset.",
        format::count(MAX_ASSET_ROWS),
        format::count(n),
        format::count(n - MAX_ASSET_ROWS),
        format::weight(below)
    ))
}

fn assets(r: &RunResult, shown: &[Portfolio]) -> Vec<AssetRow> {
    listed_assets(r, shown)
        .into_iter()
        .map(|i| (i, &r.data.assets[i]))
        .map(|(i, a)| AssetRow {
            asset: a.clone(),
            name: r.data.meta[i].name.clone(),
            class: format::title(&r.data.meta[i].class),
            bounds: bounds(r, i),
            weights: shown
                .iter()
                .map(|v| v.weights.map_or(NONE.into(), |w| format::weight(w[i])))
                .collect(),
        })
        .collect()
}

fn groups(r: &RunResult, shown: &[Portfolio]) -> Vec<GroupRow> {
    r.feasible
        .groups
        .iter()
        .map(|g| GroupRow {
            name: g.name.clone(),
            members: format::count(g.members.len()),
            range: format!(
                "{}\u{2013}{}",
                pct(g.min, Style::Weight),
                pct(g.max, Style::Weight)
            ),
            exposures: shown
                .iter()
                .map(|v| {
                    v.weights.map_or(NONE.into(), |w| {
                        pct(g.members.iter().map(|&i| w[i]).sum(), Style::Weight)
                    })
                })
                .collect(),
        })
        .collect()
}

fn limits(r: &RunResult) -> Vec<Pair> {
    let c = &r.config;
    let mut out = vec![
        pair(
            "Confidence level of the models",
            format::level(c.confidence),
        ),
        pair(
            "CVaR cap (max return)",
            format!(
                "{} ({})",
                pct(r.cvar_cap, Style::Loss),
                text::cap_rule(c.cap)
            ),
        ),
        pair(
            "Expected-return floor (min CVaR)",
            format!(
                "{} ({})",
                pct(r.return_floor, Style::Return),
                text::floor_rule(c.floor)
            ),
        ),
        pair(
            "Default asset bounds",
            format!(
                "{}\u{2013}{}",
                pct(c.default_min, Style::Weight),
                pct(c.default_max, Style::Weight)
            ),
        ),
        pair(
            "Turnover limit Σ|x − current|",
            c.turnover_max
                .map_or("none".into(), |t| pct(t, Style::Weight)),
        ),
    ];
    if !c.exclude.is_empty() {
        out.push(pair("Excluded assets", c.exclude.join(", ")));
    }
    out
}

/// The `n` assets with the largest CVaR contribution in the first solved portfolio, largest first.
fn contributors(r: &RunResult, shown: &[Portfolio], n: usize) -> Vec<Contributor> {
    let Some(base) = shown.iter().find_map(|v| v.profile) else {
        return vec![];
    };
    let mut order: Vec<usize> = (0..r.data.assets.len()).collect();
    order.sort_by(|&a, &b| {
        base.component_cvar[b]
            .total_cmp(&base.component_cvar[a])
            .then(a.cmp(&b))
    });
    order
        .into_iter()
        .take(n)
        .map(|i| Contributor {
            asset: r.data.assets[i].clone(),
            class: format::title(&r.data.meta[i].class),
            contributions: shown
                .iter()
                .map(|v| {
                    v.profile
                        .map_or(NONE.into(), |p| pct(p.component_cvar[i], Style::Loss))
                })
                .collect(),
            contributions_money: shown
                .iter()
                .map(|v| {
                    v.profile.and_then(|p| {
                        money::amount(money::fund(r), p.component_cvar[i], Style::Loss)
                    })
                })
                .collect(),
        })
        .collect()
}

fn level_word(l: Level) -> &'static str {
    match l {
        Level::Pass => "pass",
        Level::Warn => "warn",
        Level::Fail => "fail",
    }
}

/// Findings worst first (fail, warn, pass), each group in the order the run produced them.
fn checks(r: &RunResult) -> Checks {
    let mut rows: Vec<&crate::diag::Check> = r.checks.iter().collect();
    rows.sort_by_key(|c| std::cmp::Reverse(c.level));
    let n = |l: Level| r.checks.iter().filter(|c| c.level == l).count();
    Checks {
        pass: n(Level::Pass),
        warn: n(Level::Warn),
        fail: n(Level::Fail),
        rows: rows
            .into_iter()
            .map(|c| CheckRow {
                id: c.id.clone(),
                level: level_word(c.level),
                message: c.message.clone(),
            })
            .collect(),
    }
}

fn scenarios(r: &RunResult) -> Vec<Pair> {
    let s = &r.scenarios;
    if s.from_file() {
        return vec![
            pair("Scenarios", format::count(s.len())),
            pair(
                "Source",
                format!(
                    "scenario file {} (data.scenarios)",
                    r.config.scenario_name.as_deref().unwrap_or("")
                ),
            ),
            pair("Horizon", horizon_words(r)),
            pair(
                "Probabilities",
                if s.equal_probabilities {
                    "equal".to_string()
                } else {
                    "from the file".to_string()
                },
            ),
        ];
    }
    let probs = match r.config.scenarios.half_life {
        Some(h) if !s.equal_probabilities => {
            format!("decaying, half-life {} observations", format::number(h, 1))
        }
        _ => "equal".into(),
    };
    vec![
        pair("Scenarios", format::count(s.len())),
        pair("Horizon", horizon_words(r)),
        pair("Step between windows", step_words(r)),
        pair(
            "First window starts",
            s.starts.first().map(|d| d.to_string()).unwrap_or_default(),
        ),
        pair(
            "Last window ends",
            s.ends.last().map(|d| d.to_string()).unwrap_or_default(),
        ),
        pair(
            "Look-back",
            format!("{} years before as-of", r.config.scenarios.lookback_years),
        ),
        pair("Probabilities", probs),
    ]
}

fn quality(r: &RunResult) -> Quality {
    if r.config.prices.is_none() {
        return Quality {
            facts: vec![pair(
                "Price history",
                format!(
                    "none (no data.prices): the scenarios come from the scenario file {}, so there is no data-quality report on prices",
                    r.config.scenario_name.as_deref().unwrap_or("")
                ),
            )],
            clean: String::new(),
            rows: vec![],
        };
    }
    let q = &r.data.quality;
    let flagged: Vec<QualityRow> = q
        .assets
        .iter()
        .filter(|a| {
            a.missing > 0
                || a.dropped
                || a.extreme_moves > 0
                || a.longest_stale_run >= r.config.quality.stale_run
        })
        .map(|a| QualityRow {
            asset: a.asset.clone(),
            missing: a.missing.to_string(),
            filled: a.filled.to_string(),
            longest_gap: a.longest_gap.to_string(),
            stale: a.longest_stale_run.to_string(),
            extreme: a.extreme_moves.to_string(),
            status: if a.dropped { "dropped" } else { "kept" },
        })
        .collect();
    let clean = q.assets.len() - flagged.len();
    Quality {
        facts: vec![
            pair(
                "Price history",
                format!(
                    "{} to {} ({} layout)",
                    r.data.history.0,
                    r.data.history.1,
                    format!("{:?}", r.data.layout).to_lowercase()
                ),
            ),
            pair(
                "Scenario window",
                format!(
                    "{} to {}, {} observations",
                    q.window_start,
                    q.window_end,
                    format::count(q.observations)
                ),
            ),
            pair("Fill policy", q.fill_policy.clone()),
        ],
        clean: format!(
            "{} of {} assets have no finding (no missing, stale or extreme prices).",
            format::count(clean),
            format::count(q.assets.len())
        ),
        rows: flagged,
    }
}

fn inputs(results: &Value) -> Vec<Input> {
    let list = results
        .get("inputs")
        .and_then(Value::as_array)
        .cloned()
        .unwrap_or_default();
    let s = |v: &Value, k: &str| {
        v.get(k)
            .map(|x| x.as_str().map_or_else(|| x.to_string(), str::to_string))
            .unwrap_or_default()
    };
    list.iter()
        .map(|i| Input {
            role: s(i, "role"),
            path: s(i, "path"),
            bytes: i
                .get("bytes")
                .and_then(Value::as_u64)
                .map_or(String::new(), |b| format::count(b as usize)),
            sha256: s(i, "sha256"),
        })
        .collect()
}

fn run_facts(r: &RunResult, pack_id: &str, is_final: bool) -> Vec<Pair> {
    let v = typst::utils::version();
    vec![
        pair("Pack identifier", pack_id),
        pair("Tool", format!("tailpack {}", env!("CARGO_PKG_VERSION"))),
        pair(
            "Typesetting",
            format!("typst {}.{}.{}", v.major(), v.minor(), v.patch()),
        ),
        pair(
            "LP solver",
            crate::models::lp::backend_description(r.backend).to_string(),
        ),
        pair(
            "CVaR programs",
            crate::models::method_description(crate::models::method_for(
                r.scenarios.len(),
                r.backend,
            )),
        ),
        pair(
            "Status",
            if is_final {
                "FINAL (every required role has signed)"
            } else {
                "DRAFT (not signed off)"
            },
        ),
    ]
}

/// The scenario horizon in the data appendix: price observations, or months (quarters) of month-end
/// (quarter-end) prices at a monthly (quarterly) frequency.
fn horizon_words(r: &RunResult) -> String {
    let (h, f) = (r.scenarios.horizon, r.data.frequency);
    match f {
        crate::config::Frequency::Daily => format!("{h} price observations per scenario"),
        _ => format!("{} of {}-end prices per scenario", f.span(h), f.period()),
    }
}

/// The step between windows in the data appendix, in the scenario frequency's unit.
fn step_words(r: &RunResult) -> String {
    match r.data.frequency {
        crate::config::Frequency::Daily => format!("{} observation(s)", r.scenarios.step),
        f => f.span(r.scenarios.step),
    }
}
