//! The sentences of the pack that depend on the run: the summary's key points and the caveats.
//!
//! Each sentence states a number the run produced and what it means for reading the pack; none gives a
//! recommendation. Figures go through [`super::format`] like every other number in the PDF.
//!
//! May read: the [`RunResult`] and the view model ([`super::view`]).

use super::format::{self, Style, pct, shortlist};
use super::money;
use super::view::{CURRENT, Portfolio, identity, solved, status_word, stress_result};
use crate::config::{CapRule, FloorRule};
use crate::diag::Level;
use crate::run::RunResult;
use serde::Serialize;

/// One caveat: a short title and the sentence that explains it.
#[derive(Serialize)]
pub struct Caveat {
    pub title: String,
    pub text: String,
}

/// How the CVaR cap was set, in words.
pub fn cap_rule(rule: CapRule) -> String {
    match rule {
        CapRule::Value(_) => "set as an absolute value".into(),
        CapRule::TimesCurrent(m) => {
            format!("{} × the current portfolio's CVaR", format::number(m, 2))
        }
        CapRule::TimesMin(m) => format!(
            "{} × the lowest CVaR attainable within the limits",
            format::number(m, 2)
        ),
    }
}

/// How the expected-return floor was set, in words.
pub fn floor_rule(rule: FloorRule) -> String {
    match rule {
        FloorRule::Value(_) => "set as an absolute value".into(),
        FloorRule::PlusCurrent(d) => format!("current expected return {}", pct(d, Style::Points)),
    }
}

/// The summary's key points, in print order. `no_change` is why the pack has no "Since the last pack"
/// section (a first pack, or a previous pack that fails verification), if it has none.
pub fn summary(r: &RunResult, shown: &[Portfolio], no_change: Option<&str>) -> Vec<String> {
    let c = format::level(r.config.confidence);
    let span = match r.data.frequency {
        crate::config::Frequency::Daily => format!("{} price observations", r.scenarios.horizon),
        f => format!(
            "{} of {}-end prices",
            f.span(r.scenarios.horizon),
            f.period()
        ),
    };
    let measured = match r.config.basis {
        crate::config::Basis::Assets => "the fraction of portfolio value lost over one horizon".to_string(),
        crate::config::Basis::Surplus => "those of the surplus (risk.basis: surplus): the fall in assets less liabilities over one horizon, as a fraction of the assets, and expected returns are expected surplus returns, the portfolio's less the liabilities' growth over the funded ratio".to_string(),
    };
    let first = if r.scenarios.from_file() {
        format!(
            "{} joint scenarios of returns over {} each, from the scenario file {} (not from price history). VaR and CVaR at {c} are {measured}.",
            format::count(r.scenarios.len()),
            r.data.frequency.span(r.scenarios.horizon),
            file_name(r)
        )
    } else {
        format!(
            "{} scenarios of {span} each, from {} to {}. VaR and CVaR at {c} are {measured}.",
            format::count(r.scenarios.len()),
            first_start(r),
            last_end(r)
        )
    };
    let mut out = vec![first];
    out.extend(money::absent_note(r));
    let current = shown
        .iter()
        .find(|v| v.key == CURRENT)
        .and_then(|v| v.profile);
    if let Some(p) = current {
        out.push(current_point(r, p));
    }
    out.push(policy_point(r));
    out.extend(no_change.map(|why| format!("Since the last pack: {why}")));
    out.extend(
        shown
            .iter()
            .filter(|v| v.model.is_some())
            .map(|v| model_point(r, v, current) + &trade_and_active(r, v)),
    );
    out.push(checks_point(r));
    out.push(stress_point(r, shown));
    out.push(backtest_point(r));
    out
}

/// The current portfolio's expected return over one horizon and a year, and its VaR and CVaR with their
/// amounts in money.
fn current_point(r: &RunResult, p: &crate::risk::RiskProfile) -> String {
    let (c, m) = (r.config.confidence, money::fund(r));
    format!(
        "Current portfolio: expected return {} over one horizon ({} a year), VaR {} and CVaR {} at {}.",
        pct(p.expected_return, Style::Return),
        pct(
            money::annual_return(p.expected_return, money::horizons_per_year(r)),
            Style::Return
        ),
        money::pct_and_amount(m, p.at(c).var, Style::Loss),
        money::pct_and_amount(m, p.at(c).cvar, Style::Loss),
        format::level(c)
    )
}

/// The current portfolio against the policy ranges, with the figures of each breach; or that no policy is
/// configured.
fn policy_point(r: &RunResult) -> String {
    let Some(p) = &r.policy else {
        return "Policy: no policy portfolio is configured (config section `policy`), so this pack has no targets, ranges, policy benchmark or active risk.".into();
    };
    let Some(x) = p.positions.iter().find(|x| x.portfolio == CURRENT) else {
        return "Policy: no current holdings were given, so there is no current position to compare with the policy ranges.".into();
    };
    let outside: Vec<String> = x
        .breached(&p.lines)
        .map(|(l, e)| breach_figures(r, l, e))
        .collect();
    if outside.is_empty() {
        return format!(
            "Policy: the current portfolio lies inside the permitted range of all {} policy lines.",
            p.lines.len()
        );
    }
    format!(
        "Policy: the current portfolio is outside its permitted range in {}.",
        outside.join("; ")
    )
}

/// `Government bonds at 16.00% (target 20.00%, range 17.00%–30.00%; 1.00%, XTS 23,500,000 below the
/// range)`: the exposure, the line's target and range, and how far outside the range it lies.
fn breach_figures(r: &RunResult, l: &crate::analysis::policy::Line, e: f64) -> String {
    let (gap, side) = if e < l.min {
        (l.min - e, "below")
    } else {
        (e - l.max, "above")
    };
    format!(
        "{} at {} (target {}, range {}\u{2013}{}; {} {side} the range)",
        l.name,
        pct(e, Style::Weight),
        pct(l.target, Style::Weight),
        pct(l.min, Style::Weight),
        pct(l.max, Style::Weight),
        money::pct_then_amount(money::fund(r), gap, Style::Weight)
    )
}

/// A solved model's cost of getting there from the current holdings (basis points and money) and its
/// active risk against the policy benchmark (tracking error a year, active CVaR), as a second sentence;
/// empty for what the run does not have (no cost rates or holdings, no policy, no solution).
fn trade_and_active(r: &RunResult, v: &Portfolio) -> String {
    let Some(m) = v.model.filter(|m| solved(m)) else {
        return String::new();
    };
    let mut parts = Vec::new();
    if let (Some(cost), true, true) = (m.cost, r.config.costs.any(), r.data.holdings.is_some()) {
        let bps = format!("{} bps", format::number(cost * 10_000.0, 1));
        parts.push(match money::amount_in(money::fund(r), cost, Style::Loss) {
            Some(a) => format!("transaction cost {bps} ({a})"),
            None => format!("transaction cost {bps} of the fund's value"),
        });
    }
    let position = r
        .policy
        .as_ref()
        .and_then(|p| p.positions.iter().find(|x| x.portfolio == v.key));
    if let Some(x) = position {
        let (c, fund) = (r.config.confidence, money::fund(r));
        parts.push(format!(
            "against the policy benchmark, tracking error {} a year and active CVaR {} {} over one horizon",
            money::pct_and_amount(fund, x.active.tracking_error_annualised, Style::Weight),
            format::level(c),
            money::pct_and_amount(fund, x.active.at(c).cvar, Style::Loss)
        ));
    }
    if parts.is_empty() {
        return String::new();
    }
    // Both parts start with an ASCII letter, capitalised here as the sentence's first.
    let text = parts.join("; ");
    format!(" {}{}.", text[..1].to_uppercase(), &text[1..])
}

/// The stress tests in one sentence: how many scenarios, and who breaches the loss limit where.
fn stress_point(r: &RunResult, shown: &[Portfolio]) -> String {
    let a = &r.analysis;
    if a.shocks.is_empty() || a.stress.is_empty() {
        return "Stress tests: none was run (section §stress says why).".into();
    }
    let defined = a.shocks.iter().filter(|s| s.kind == "defined").count();
    let mut out = format!(
        "Stress tests: {} scenarios ({} defined by the fund, {} historical windows); each portfolio's worst loss is in the table below.",
        a.shocks.len(),
        defined,
        a.shocks.len() - defined
    );
    let Some(limit) = r.config.stress_loss_limit else {
        return out;
    };
    let limit_text = money::pct_and_amount(money::fund(r), limit, Style::Loss);
    let over: Vec<&str> = shown
        .iter()
        .filter(|v| stress_result(r, v.key).is_some_and(|s| !s.breaches.is_empty()))
        .map(|v| v.identity.label)
        .collect();
    out.push_str(&match over.len() {
        0 => format!(" No portfolio loses more than the limit of {limit_text}."),
        1 => format!(
            " {} loses more than the limit of {limit_text} in at least one scenario.",
            over[0]
        ),
        _ => format!(
            " {} lose more than the limit of {limit_text} in at least one scenario.",
            list(&over)
        ),
    });
    out
}

/// The backtest in one sentence: exceptions per model against the expected number, and the rejections.
fn backtest_point(r: &RunResult) -> String {
    let Some(b) = &r.analysis.backtest else {
        return "Walk-forward backtest: not run (section §backtest says why).".into();
    };
    let Some(first) = b.tracks.first() else {
        return "Walk-forward backtest: no model to test.".into();
    };
    let counts: Vec<String> = b
        .tracks
        .iter()
        .map(|t| format!("{} ({})", t.exceptions, identity(t.model).label))
        .collect();
    let counts: Vec<&str> = counts.iter().map(String::as_str).collect();
    let rejected: Vec<&str> = b
        .tracks
        .iter()
        .filter(|t| t.kupiec.is_some_and(|k| k.p_value < 0.05))
        .map(|t| identity(t.model).label)
        .collect();
    let verdict = match rejected.len() {
        0 => "no model's exception rate is rejected at 5%".to_string(),
        _ => format!(
            "the exception rate of {} is rejected at 5%",
            list(&rejected)
        ),
    };
    format!(
        "Walk-forward backtest over {} months: {} losses beyond the predicted VaR {}, against {} expected; {verdict}.",
        first.observations,
        list(&counts),
        format::level(b.confidence),
        format::number(first.expected_exceptions, 1)
    )
}

/// Names joined as prose: `A`, `A and B`, `A, B and C`.
fn list(names: &[&str]) -> String {
    match names {
        [] => String::new(),
        [one] => one.to_string(),
        [init @ .., last] => format!("{} and {last}", init.join(", ")),
    }
}

fn model_point(r: &RunResult, v: &Portfolio, current: Option<&crate::risk::RiskProfile>) -> String {
    let m = v.model.expect("a model view");
    let Some(p) = v.profile.filter(|_| solved(m)) else {
        return format!(
            "{}: {}. {}",
            v.identity.label,
            status_word(v),
            m.outcome
                .message
                .as_deref()
                .unwrap_or("No portfolio is reported.")
        );
    };
    let c = r.config.confidence;
    let versus = |now: f64, then: Option<f64>| {
        then.map_or(String::new(), |t| {
            format!(" ({} against current)", pct(now - t, Style::Points))
        })
    };
    let turnover = m.turnover.map_or(String::new(), |t| {
        format!(", turnover {}", pct(t, Style::Weight))
    });
    format!(
        "{}: expected return {}{}, CVaR {}{}{turnover}.",
        v.identity.label,
        pct(p.expected_return, Style::Return),
        versus(p.expected_return, current.map(|q| q.expected_return)),
        pct(p.at(c).cvar, Style::Loss),
        versus(p.at(c).cvar, current.map(|q| q.at(c).cvar))
    )
}

fn checks_point(r: &RunResult) -> String {
    let n = |l: Level| r.checks.iter().filter(|c| c.level == l).count();
    format!(
        "Checks: {} passed, {} warning(s), {} failure(s); each is listed under Checks.",
        n(Level::Pass),
        n(Level::Warn),
        n(Level::Fail)
    )
}

/// The scenario file's name as the config writes it.
fn file_name(r: &RunResult) -> &str {
    r.config.scenario_name.as_deref().unwrap_or("")
}

/// Why a part that re-estimates scenarios from the price history is not in a pack whose scenarios come
/// from a scenario file (`data.scenarios`).
pub fn from_file_absent(r: &RunResult, part: &str) -> String {
    format!(
        "{part}: not run. The scenarios come from the scenario file {} (data.scenarios), and this part re-estimates scenarios from the price history, which is not where those scenarios come from.",
        r.config.scenario_name.as_deref().unwrap_or("")
    )
}

fn first_start(r: &RunResult) -> String {
    r.scenarios
        .starts
        .first()
        .map(|d| d.to_string())
        .unwrap_or_default()
}

fn last_end(r: &RunResult) -> String {
    r.scenarios
        .ends
        .last()
        .map(|d| d.to_string())
        .unwrap_or_default()
}

/// The caveats that apply to this run, general ones first, then one per model where it matters.
pub fn caveats(r: &RunResult, shown: &[Portfolio]) -> Vec<Caveat> {
    let mut out = vec![history(r, shown), tail_count(r), estimates()];
    out.extend(shown.iter().filter_map(|v| binding(r, v)));
    out.extend(stress_caveats(r));
    out.extend(backtest_caveats(r));
    out.push(costs_caveat(r));
    let warned = r.checks.iter().filter(|c| c.level != Level::Pass).count();
    if warned > 0 {
        out.push(caveat("Open findings", &format!("{warned} check(s) did not pass; each is listed under Checks with its evidence and should be read before the figures are relied on.")));
    }
    out
}

/// What the figures leave out of the cost of trading: everything without cost rates; market impact,
/// liquidity and taxes with them (the rates themselves being estimates).
fn costs_caveat(r: &RunResult) -> Caveat {
    let tail = "Implementing a candidate in full may cost more, and take longer, than the figures suggest.";
    let text = if !r.config.costs.any() {
        format!(
            "The models include no transaction costs, market impact, liquidity or taxes; the turnover limit is the only trading constraint. {tail}"
        )
    } else if r.data.holdings.is_none() {
        format!(
            "Transaction cost rates are configured, but without current holdings the models charge none (the backtest charges them on each rebalance after its first month). Market impact, liquidity and taxes are not included. {tail}"
        )
    } else {
        format!(
            "The models and the backtest charge the configured one-way transaction cost rates, which are estimates; market impact, liquidity and taxes are not included, and the turnover limit is the only trading constraint. {tail}"
        )
    };
    caveat("Costs and liquidity", &text)
}

fn caveat(title: &str, text: &str) -> Caveat {
    Caveat {
        title: title.into(),
        text: text.into(),
    }
}

fn history(r: &RunResult, shown: &[Portfolio]) -> Caveat {
    let worst = shown
        .iter()
        .filter_map(|v| v.profile)
        .map(|p| p.worst_loss)
        .fold(f64::NAN, f64::max);
    if r.scenarios.from_file() {
        return caveat(
            "Scenarios are a model's, not the future",
            &format!(
                "The scenarios are those of the scenario file {}, made by whatever model produced it; the pack's figures are only as good as that model. The largest loss of any portfolio in the pack over them is {}; larger losses are possible.",
                file_name(r),
                money::pct_and_amount(money::fund(r), worst, Style::Loss)
            ),
        );
    }
    caveat(
        "History is not the future",
        &format!(
            "The scenarios are the returns observed between {} and {}. The largest loss of any portfolio in the pack over them is {}; larger losses are possible, and a calm history gives tail figures that look benign.",
            first_start(r),
            last_end(r),
            money::pct_and_amount(money::fund(r), worst, Style::Loss)
        ),
    )
}

/// How many scenarios a tail average rests on, and how many windows are independent.
fn tail_count(r: &RunResult) -> Caveat {
    let s = &r.scenarios;
    let independent = (s.len() * s.step) / s.horizon.max(1);
    let levels: Vec<String> = r
        .config
        .levels
        .iter()
        .map(|&c| {
            format!(
                "{} of {} at {}",
                format::count(((1.0 - c) * s.len() as f64).ceil() as usize),
                format::count(s.len()),
                format::level(c)
            )
        })
        .collect();
    let weighting = if s.equal_probabilities {
        "the worst"
    } else {
        "the probability-weighted worst"
    };
    if s.from_file() {
        return caveat(
            "Few tail scenarios",
            &format!(
                "CVaR averages {weighting} scenarios only: {}; tail figures carry sampling error that shrinks only as the scenario file grows.",
                levels.join(", ")
            ),
        );
    }
    caveat(
        "Few tail scenarios",
        &format!(
            "CVaR averages {weighting} scenarios only: {}. Consecutive windows overlap (horizon {}, step {}), so only about {} of them are independent; tail figures carry wide sampling error.",
            levels.join(", "),
            s.horizon,
            s.step,
            format::count(independent)
        ),
    )
}

fn estimates() -> Caveat {
    caveat(
        "Expected returns are estimates",
        "Expected returns are the scenario means. They are estimated far less precisely than risk, and optimisers lean on exactly those errors (Michaud 1989, \"The Markowitz optimization enigma: is optimized optimal?\", Financial Analysts Journal 45(1)). Differences of a few tenths of a percentage point between candidates are within that error.",
    )
}

/// Which limits bind a solved model: assets at their upper bound, the turnover limit, group limits.
fn binding(r: &RunResult, v: &Portfolio) -> Option<Caveat> {
    let m = v.model?;
    if !solved(m) {
        return Some(caveat(
            &format!("{}: {}", v.identity.label, status_word(v)),
            m.outcome
                .message
                .as_deref()
                .unwrap_or("no portfolio is reported"),
        ));
    }
    let w = v.weights?;
    let mut parts = Vec::new();
    if !m.at_upper.is_empty() {
        parts.push(format!(
            "{} asset(s) at their upper bound ({})",
            m.at_upper.len(),
            shortlist(&m.at_upper, 6)
        ));
    }
    if let (Some(t), Some(max)) = (m.turnover, r.config.turnover_max)
        && t >= max - 1e-6
    {
        parts.push(format!(
            "turnover at its limit of {}",
            pct(max, Style::Weight)
        ));
    }
    for g in &r.feasible.groups {
        let x: f64 = g.members.iter().map(|&i| w[i]).sum();
        if (x - g.max).abs() < 1e-6 && g.max < 1.0 {
            parts.push(format!(
                "{} at its maximum of {}",
                g.name,
                pct(g.max, Style::Weight)
            ));
        } else if (x - g.min).abs() < 1e-6 && g.min > 0.0 {
            parts.push(format!(
                "{} at its minimum of {}",
                g.name,
                pct(g.min, Style::Weight)
            ));
        }
    }
    (!parts.is_empty()).then(|| caveat(&format!("{}: limits that bind", v.identity.label), &format!(
        "This portfolio is shaped by its limits: {}. Loosening a binding limit would change the portfolio; the limits come from the fund's policy, not from the data.", parts.join("; "))))
}

/// What limits the reading of the stress results: configured magnitudes, and windows chosen for one portfolio.
fn stress_caveats(r: &RunResult) -> Vec<Caveat> {
    let a = &r.analysis;
    let mut out = Vec::new();
    let defined = a.shocks.iter().filter(|s| s.kind == "defined").count();
    if defined > 0 {
        let file = r
            .config
            .stress_name
            .as_ref()
            .map_or(String::new(), |n| format!(" ({n})"));
        out.push(caveat("Stress magnitudes are configured, not calibrated", &format!(
            "The {defined} defined shocks are the fund's configured scenarios{file}: their magnitudes were set by the fund, not estimated from data; they carry no probability and are not forecasts. Each moves an asset by the one entry that matches it (its own, else the first matching tag), with no second-round effects; an asset a shock does not name does not move.")));
    }
    if a.shocks.iter().any(|s| s.kind == "historical") {
        let basis = if r.data.holdings.is_some() {
            "current holdings"
        } else {
            "equally weighted portfolio"
        };
        out.push(caveat("Historical windows are chosen for one portfolio", &format!(
            "The historical stress windows are the worst of the price history for the {basis}; another portfolio's worst window may be a different one, and its worst historical loss is then larger than the table shows.")));
    }
    out
}

/// What limits the reading of the backtest: thin evidence, rejected models, skipped months, or no backtest.
fn backtest_caveats(r: &RunResult) -> Vec<Caveat> {
    let Some(b) = &r.analysis.backtest else {
        return vec![caveat(
            "No out-of-sample evidence",
            "The walk-forward backtest was not run, so nothing in this pack shows how the models' predictions compared with what followed.",
        )];
    };
    let months = b.tracks.first().map_or(0, |t| t.observations);
    let mut out = vec![caveat(
        "Backtest evidence is thin",
        &format!(
            "The backtest rests on {months} monthly outcomes per model, overlapping in their look-back data. With so few months the VaR tests have little power: passing them is weak evidence that a VaR is right, and final wealth reflects one path of history."
        ),
    )];
    let level = format::level(b.confidence);
    for t in b
        .tracks
        .iter()
        .filter(|t| t.kupiec.is_some_and(|k| k.p_value < 0.05))
    {
        let p = format::p_value(t.kupiec.expect("filtered").p_value);
        let reading = if t.exceptions as f64 > t.expected_exceptions {
            "more often than the level allows, so the model's VaR and CVaR in this pack may understate the tail"
        } else {
            "less often than the level allows, so the model's VaR may overstate the tail"
        };
        out.push(caveat(&format!("{}: backtest rejects the exception rate", identity(t.model).label), &format!(
            "{} losses beyond the predicted VaR {level} in {} months against {} expected: Kupiec's test rejects that rate at 5% (p-value {p}). Losses beyond VaR came {reading}.",
            t.exceptions, t.observations, format::number(t.expected_exceptions, 1))));
    }
    if !b.skipped.is_empty() {
        out.push(caveat("Months skipped in the backtest", &format!(
            "{} of {} month-ends could not be solved and count as months without a return; they are listed in section §backtest.", b.skipped.len(), b.rebalances.len())));
    }
    out
}
