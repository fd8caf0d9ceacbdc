//! Display data of the "Further analysis" section (`further` in `/data/report.json`): the efficient
//! frontier, the stress set and the walk-forward backtest, every figure formatted by [`super::format`].
//!
//! A part that did not run is `null`, and its `*_absent` field carries the sentence that says why, so the
//! section states it plainly instead of vanishing (DEVELOPERS.md, "Adding a report section").
//!
//! Reads [`RunResult::analysis`] and the config; computes nothing beyond what display needs: return per
//! unit of CVaR of the frontier points, and a model's mean predicted and realised return and mean turnover
//! over the backtest months.

use super::charts::{Look, look};
use super::data::{Pair, View, class_order};
use super::format::{self, Style, pct};
use crate::analysis::backtest::{Backtest, DAILY_LEVEL, DAILY_OBSERVATIONS, DailyCheck, Track};
use crate::analysis::frontier::Frontier;
use crate::analysis::stress::{Shock, StressResult};
use crate::analysis::vartest::{LrTest, Zone};
use crate::run::RunResult;
use serde::Serialize;

const NONE: &str = "\u{2014}";

/// The three parts of the section; each is either shown or absent with its reason.
#[derive(Serialize)]
pub struct Further {
    pub frontier: Option<FrontierShow>,
    pub frontier_absent: Option<String>,
    pub stress: Option<StressShow>,
    pub stress_absent: Option<String>,
    pub backtest: Option<BacktestShow>,
    pub backtest_absent: Option<String>,
}

/// A column head: a portfolio's label with its colour and marker, as `portfolio-name` in style.typ draws it.
#[derive(Serialize)]
pub struct Head {
    pub key: &'static str,
    pub label: &'static str,
    pub colour: &'static str,
    pub marker: &'static str,
}

fn head(l: &Look) -> Head {
    Head {
        key: l.key,
        label: l.label,
        colour: l.hex,
        marker: l.marker_name,
    }
}

/// Builds the section's data; `views` are the portfolios in report order.
pub fn build(r: &RunResult, views: &[View]) -> Further {
    let (frontier, frontier_absent) = split(frontier(r));
    let (stress, stress_absent) = split(stress(r, views));
    let (backtest, backtest_absent) = split(backtest(r));
    Further {
        frontier,
        frontier_absent,
        stress,
        stress_absent,
        backtest,
        backtest_absent,
    }
}

fn split<T>(part: Result<T, String>) -> (Option<T>, Option<String>) {
    match part {
        Ok(t) => (Some(t), None),
        Err(why) => (None, Some(why)),
    }
}

// ---------------------------------------------------------------------------------------------------------
// Efficient frontier

/// Every `FRONTIER_STEP`-th frontier point (and the last) goes into the table; the chart shows them all.
pub const FRONTIER_STEP: usize = 4;

/// The frontier as printed.
#[derive(Serialize)]
pub struct FrontierShow {
    pub solved: String,
    pub requested: String,
    pub low: String,
    pub high: String,
    pub step: usize,
    pub rows: Vec<FrontierRow>,
    /// The numeric side of the ray's check: how the frontier points' ratios compare with the max-ratio model's.
    pub tangency: Option<String>,
}

/// One frontier point in the table.
#[derive(Serialize)]
pub struct FrontierRow {
    pub point: String,
    pub cvar: String,
    pub var: String,
    pub expected_return: String,
    pub ratio: String,
}

/// A solved frontier point: its 1-based position in the sweep, CVaR, VaR and expected return.
#[derive(Debug, Clone, Copy)]
pub struct Solved {
    pub point: usize,
    pub cvar: f64,
    pub var: f64,
    pub expected_return: f64,
}

/// The frontier points that have a solution, in sweep order (lowest CVaR first).
pub fn solved_points(f: &Frontier) -> Vec<Solved> {
    f.points
        .iter()
        .enumerate()
        .filter(|(_, p)| p.status == "optimal")
        .filter_map(|(i, p)| {
            Some(Solved {
                point: i + 1,
                cvar: p.cvar?,
                var: p.var?,
                expected_return: p.expected_return?,
            })
        })
        .collect()
}

/// Expected return per unit of CVaR, defined for a positive CVaR only (as in the summary table).
fn ratio(er: f64, cvar: f64) -> Option<f64> {
    (cvar > 0.0).then(|| er / cvar)
}

/// The max-ratio model's (CVaR, expected return) at the model level, when it was solved.
pub fn max_ratio_point(r: &RunResult) -> Option<(f64, f64)> {
    let m = r
        .models
        .iter()
        .find(|m| m.family == crate::models::Family::MaxRatio)
        .filter(|m| super::data::solved(m))?;
    let p = m.profile.as_ref()?;
    Some((p.at(r.config.confidence).cvar, p.expected_return))
}

fn frontier(r: &RunResult) -> Result<FrontierShow, String> {
    let f = r.analysis.frontier.as_ref().ok_or_else(|| {
        "The efficient frontier was not computed: the lowest-CVaR or the highest-return program has no solution within the limits (see Checks), so there is no range of CVaR caps to sweep.".to_string()
    })?;
    let pts = solved_points(f);
    if pts.is_empty() {
        return Err(format!(
            "The efficient frontier was not computed: none of its {} CVaR caps gave a solution within the limits.",
            f.points.len()
        ));
    }
    let last = pts.len() - 1;
    let rows = pts
        .iter()
        .enumerate()
        .filter(|(i, _)| i % FRONTIER_STEP == 0 || *i == last)
        .map(|(_, p)| FrontierRow {
            point: p.point.to_string(),
            cvar: pct(p.cvar, Style::Loss),
            var: pct(p.var, Style::Loss),
            expected_return: pct(p.expected_return, Style::Return),
            ratio: ratio(p.expected_return, p.cvar).map_or("n/a".into(), |x| format::number(x, 4)),
        })
        .collect();
    Ok(FrontierShow {
        solved: format::count(pts.len()),
        requested: format::count(f.points.len()),
        low: pct(f.min_cvar, Style::Loss),
        high: pct(f.max_return_cvar, Style::Loss),
        step: FRONTIER_STEP,
        rows,
        tangency: tangency(r, &pts),
    })
}

/// Charnes and Cooper (1962): the max-ratio portfolio maximises return per unit of CVaR over the feasible
/// set, so no frontier point (all within the same set) may have a higher ratio. States the comparison.
fn tangency(r: &RunResult, pts: &[Solved]) -> Option<String> {
    let (cvar, er) = max_ratio_point(r)?;
    let star = ratio(er, cvar)?;
    let best = pts
        .iter()
        .filter_map(|p| ratio(p.expected_return, p.cvar).map(|x| (p.point, x)))
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    // A relative hair of slack: both figures come from LP solutions with their own tolerances.
    let below = best.1 <= star + 1e-6 * star.abs().max(1e-9);
    Some(if below {
        format!(
            "In numbers: Max ratio earns {} of expected return per unit of CVaR; the best of the frontier points, point {}, earns {}, and none earns more.",
            format::number(star, 4),
            best.0,
            format::number(best.1, 4)
        )
    } else {
        format!(
            "In numbers: frontier point {} earns {} of expected return per unit of CVaR, more than Max ratio's {}; the ratio model fell short of the frontier's best ratio and should be reviewed.",
            best.0,
            format::number(best.1, 4),
            format::number(star, 4)
        )
    })
}

// ---------------------------------------------------------------------------------------------------------
// Stress set

/// The stress set as printed.
#[derive(Serialize)]
pub struct StressShow {
    pub heads: Vec<Head>,
    pub loss_limit: Option<String>,
    pub defined: usize,
    pub historical: usize,
    /// Where the historical windows were chosen from: the current holdings or, without them, equal weights.
    pub reference: String,
    pub horizon: usize,
    pub rows: Vec<StressRow>,
    pub worst: Vec<WorstCell>,
    pub classes: Vec<StressClassRow>,
    pub breaches: Vec<String>,
}

/// One shock: its name, kind, a note (description, dates, unmoved assets) and one cell per portfolio.
#[derive(Serialize)]
pub struct StressRow {
    pub name: String,
    pub kind: &'static str,
    pub note: String,
    pub cells: Vec<StressCell>,
}

/// A portfolio's P&L under one shock, and whether it is that portfolio's worst or beyond the loss limit.
#[derive(Serialize)]
pub struct StressCell {
    pub pnl: String,
    pub worst: bool,
    pub breach: bool,
}

/// A portfolio's worst shock.
#[derive(Serialize)]
pub struct WorstCell {
    pub shock: String,
    pub pnl: String,
    pub loss: String,
}

/// One asset class's part of each portfolio's P&L in that portfolio's worst shock.
#[derive(Serialize)]
pub struct StressClassRow {
    pub class: String,
    pub cells: Vec<String>,
}

/// The stress result of a portfolio key (`current` or a model name), if it was stressed.
pub fn result_of<'a>(r: &'a RunResult, key: &str) -> Option<&'a StressResult> {
    r.analysis.stress.iter().find(|s| s.portfolio == key)
}

/// A portfolio's worst stress loss (a positive number is a loss) and the shock that causes it.
pub fn worst_stress<'a>(r: &'a RunResult, key: &str) -> Option<(f64, &'a str)> {
    let s = result_of(r, key)?;
    let shock = r.analysis.shocks.get(s.worst)?;
    Some((-s.pnl[s.worst], shock.name.as_str()))
}

fn stress(r: &RunResult, views: &[View]) -> Result<StressShow, String> {
    let a = &r.analysis;
    if a.shocks.is_empty() {
        return Err(no_shocks(r));
    }
    if a.stress.is_empty() {
        return Err("No stress result: there are no current holdings and no model has a solution, so there is no portfolio to stress.".into());
    }
    let results: Vec<Option<&StressResult>> = views.iter().map(|v| result_of(r, v.key)).collect();
    let rows = a
        .shocks
        .iter()
        .enumerate()
        .map(|(k, s)| StressRow {
            name: s.name.clone(),
            kind: s.kind,
            note: shock_note(r, s),
            cells: results
                .iter()
                .map(|res| match res {
                    Some(x) => StressCell {
                        pnl: pct(x.pnl[k], Style::Return),
                        worst: x.worst == k,
                        breach: x.breaches.contains(&k),
                    },
                    None => StressCell {
                        pnl: NONE.into(),
                        worst: false,
                        breach: false,
                    },
                })
                .collect(),
        })
        .collect();
    Ok(StressShow {
        heads: views.iter().map(|v| head(v.look)).collect(),
        loss_limit: r.config.stress_loss_limit.map(|l| pct(l, Style::Loss)),
        defined: a.shocks.iter().filter(|s| s.kind == "defined").count(),
        historical: a.shocks.iter().filter(|s| s.kind == "historical").count(),
        reference: if r.data.holdings.is_some() {
            "the current holdings".into()
        } else {
            "equal weights (no holdings were given)".into()
        },
        horizon: r.config.scenarios.horizon,
        rows,
        worst: results
            .iter()
            .map(|res| worst_cell(a.shocks.as_slice(), *res))
            .collect(),
        classes: stress_classes(r, &results),
        breaches: views
            .iter()
            .zip(&results)
            .filter_map(|(v, res)| breach_sentence(r, v.look.label, (*res)?))
            .collect(),
    })
}

fn no_shocks(r: &RunResult) -> String {
    let c = &r.config;
    let file = if c.stress_file.is_some() {
        "the stress file defines no shock"
    } else {
        "no stress file is configured (stress.file)"
    };
    let windows = if c.stress_windows == 0 {
        "no historical window was asked for (stress.historical_windows: 0)".to_string()
    } else {
        format!(
            "the price history is too short for a {}-observation historical window",
            c.scenarios.horizon
        )
    };
    format!("No stress test was run: {file}, and {windows}.")
}

/// The line under a shock's name: the file's description for a defined shock (a historical window's name
/// already carries its dates), and the assets the shock leaves where they are.
fn shock_note(r: &RunResult, s: &Shock) -> String {
    let mut note = if s.kind == "defined" {
        sentence(&s.description)
    } else {
        String::new()
    };
    if !s.unshocked.is_empty() {
        let n = s.unshocked.len();
        let what = if s.kind == "historical" {
            "without prices at both ends, not moved"
        } else {
            "not moved by this shock"
        };
        note.push_str(&format!(
            " {} of {} assets {what}: {}.",
            n,
            r.data.assets.len(),
            shortlist(&s.unshocked, 4)
        ));
    }
    note.trim().to_string()
}

/// Text ending in a full stop (descriptions in the stress file may or may not have one).
fn sentence(text: &str) -> String {
    let t = text.trim();
    if t.is_empty() || t.ends_with(['.', '!', '?']) {
        t.to_string()
    } else {
        format!("{t}.")
    }
}

fn shortlist(names: &[String], n: usize) -> String {
    if names.len() <= n {
        names.join(", ")
    } else {
        format!("{} and {} more", names[..n].join(", "), names.len() - n)
    }
}

fn worst_cell(shocks: &[Shock], res: Option<&StressResult>) -> WorstCell {
    match res.and_then(|x| shocks.get(x.worst).map(|s| (x, s))) {
        Some((x, s)) => WorstCell {
            shock: s.name.clone(),
            pnl: pct(x.pnl[x.worst], Style::Return),
            loss: pct(-x.pnl[x.worst], Style::Loss),
        },
        None => WorstCell {
            shock: NONE.into(),
            pnl: NONE.into(),
            loss: NONE.into(),
        },
    }
}

/// Contributions by class to each portfolio's worst shock, classes in the order of the asset list.
fn stress_classes(r: &RunResult, results: &[Option<&StressResult>]) -> Vec<StressClassRow> {
    class_order(r)
        .into_iter()
        .map(|class| StressClassRow {
            cells: results
                .iter()
                .map(|res| {
                    res.and_then(|x| {
                        x.by_class
                            .get(x.worst)?
                            .iter()
                            .find(|(c, _)| *c == class)
                            .map(|(_, v)| pct(*v, Style::Return))
                    })
                    .unwrap_or_else(|| NONE.into())
                })
                .collect(),
            class: format::title(&class),
        })
        .collect()
}

fn breach_sentence(r: &RunResult, label: &str, res: &StressResult) -> Option<String> {
    let limit = r.config.stress_loss_limit?;
    if res.breaches.is_empty() {
        return None;
    }
    let shocks: Vec<String> = res
        .breaches
        .iter()
        .map(|&k| {
            format!(
                "{} ({})",
                r.analysis.shocks[k].name,
                pct(res.pnl[k], Style::Return)
            )
        })
        .collect();
    Some(format!(
        "{label} loses more than the {} limit in: {}.",
        pct(limit, Style::Loss),
        shocks.join("; ")
    ))
}

// ---------------------------------------------------------------------------------------------------------
// Walk-forward backtest

/// The backtest as printed.
#[derive(Serialize)]
pub struct BacktestShow {
    pub level: String,
    pub facts: Vec<Pair>,
    pub scores: Vec<Score>,
    pub daily: Vec<DailyRow>,
    pub daily_window: Option<String>,
    pub daily_absent: Option<String>,
    pub skipped: Vec<Pair>,
}

/// A model's backtest: its VaR exceptions with the two likelihood-ratio tests and the verdict in words, and
/// its out-of-sample returns.
#[derive(Serialize)]
pub struct Score {
    pub head: Head,
    pub months: String,
    pub exceptions: String,
    pub expected: String,
    pub kupiec_lr: String,
    pub kupiec_p: String,
    pub christoffersen_lr: String,
    pub christoffersen_p: String,
    /// The verdict on the exception rate, and on clustering when tested.
    pub verdict_rate: String,
    pub verdict_clustering: Option<String>,
    pub mean_predicted: String,
    pub mean_realised: String,
    pub mean_error: String,
    pub mean_turnover: String,
    pub final_wealth: String,
    pub total_return: String,
}

/// A model's daily 99% VaR traffic-light result.
#[derive(Serialize)]
pub struct DailyRow {
    pub head: Head,
    pub observations: String,
    pub exceptions: String,
    pub expected: String,
    pub probability: String,
    /// The zone as a word (`Green`, `Yellow`, `Red`), or `not run`.
    pub zone: String,
    /// `green`, `yellow`, `red` or `none`, for the badge's colour only; the word carries the meaning.
    pub zone_key: &'static str,
}

fn backtest(r: &RunResult) -> Result<BacktestShow, String> {
    let years = r.config.analysis.backtest_years;
    let b = r.analysis.backtest.as_ref().ok_or_else(|| if years == 0 {
        "The walk-forward backtest was not run: it is switched off in the config (analysis.backtest_years: 0). No out-of-sample evidence on the models is shown.".to_string()
    } else {
        format!("The walk-forward backtest was not run: no pair of consecutive month-ends of the price history falls within the last {years} year(s) before the as-of date.")
    })?;
    let level = format::level(b.confidence);
    let (daily, daily_window, daily_absent) = daily(r, b);
    Ok(BacktestShow {
        facts: backtest_facts(r, b),
        scores: b.tracks.iter().map(|t| score(t, &level)).collect(),
        daily,
        daily_window,
        daily_absent,
        skipped: b
            .skipped
            .iter()
            .map(|(d, why)| Pair {
                label: d.to_string(),
                value: sentence(why),
            })
            .collect(),
        level,
    })
}

fn backtest_facts(r: &RunResult, b: &Backtest) -> Vec<Pair> {
    let first = b
        .rebalances
        .first()
        .map(|d| d.to_string())
        .unwrap_or_default();
    let last = b
        .rebalances
        .last()
        .map(|d| d.to_string())
        .unwrap_or_default();
    let end = b
        .tracks
        .first()
        .and_then(|t| t.rows.last())
        .map(|row| row.next.to_string())
        .unwrap_or_default();
    let c = &r.config;
    vec![
        Pair {
            label: "Decision dates".into(),
            value: format!(
                "{} month-ends, {first} to {last}, each held to the next month-end (the last to {end})",
                format::count(b.rebalances.len())
            ),
        },
        Pair {
            label: "Data at each date".into(),
            value: format!(
                "prices up to that month-end only; {}-year look-back, horizon {}, step {}",
                c.scenarios.lookback_years, c.scenarios.horizon, c.scenarios.step
            ),
        },
        Pair {
            label: "Prediction tested".into(),
            value: format!(
                "VaR {} over one horizon against the loss to the next month-end",
                format::level(b.confidence)
            ),
        },
        Pair {
            label: "Months skipped".into(),
            value: if b.skipped.is_empty() {
                "none".into()
            } else {
                format!("{} (listed below)", b.skipped.len())
            },
        },
    ]
}

fn lr(t: Option<LrTest>) -> (String, String) {
    t.map_or((NONE.into(), NONE.into()), |t| {
        (format::number(t.statistic, 2), format::p_value(t.p_value))
    })
}

/// The verdict at 5% in words: Kupiec (1995) on the exception rate, then Christoffersen (1998) on whether
/// exceptions cluster (absent when there are too few months for the test).
pub fn verdict(t: &Track, level: &str) -> (String, Option<String>) {
    let Some(k) = t.kupiec else {
        return (
            "Not tested: no month has both a prediction and an outcome".into(),
            None,
        );
    };
    let rate = if k.p_value >= 0.05 {
        format!("Exception rate consistent with the {level} level")
    } else if t.exceptions as f64 > t.expected_exceptions {
        "Too many exceptions: rate rejected at 5%".to_string()
    } else {
        "Too few exceptions: rate rejected at 5%".to_string()
    };
    let clustering = t.christoffersen.map(|c| {
        if c.p_value < 0.05 {
            "exceptions cluster: independence rejected at 5%".to_string()
        } else {
            "no sign of clustering".to_string()
        }
    });
    (rate, clustering)
}

fn mean(values: impl Iterator<Item = f64>) -> Option<f64> {
    let (sum, n) = values.fold((0.0, 0usize), |(s, n), v| (s + v, n + 1));
    (n > 0).then(|| sum / n as f64)
}

fn score(t: &Track, level: &str) -> Score {
    let (kupiec_lr, kupiec_p) = lr(t.kupiec);
    let (christoffersen_lr, christoffersen_p) = lr(t.christoffersen);
    let (verdict_rate, verdict_clustering) = verdict(t, level);
    let or_none = |x: Option<f64>, style: Style| x.map_or(NONE.into(), |v| pct(v, style));
    Score {
        head: head(look(t.model)),
        months: format::count(t.observations),
        exceptions: t.exceptions.to_string(),
        expected: format::number(t.expected_exceptions, 1),
        kupiec_lr,
        kupiec_p,
        christoffersen_lr,
        christoffersen_p,
        verdict_rate,
        verdict_clustering,
        mean_predicted: or_none(
            mean(t.rows.iter().filter_map(|r| r.predicted_return)),
            Style::Return,
        ),
        mean_realised: or_none(
            mean(t.rows.iter().filter_map(|r| r.realised_return)),
            Style::Return,
        ),
        mean_error: or_none(t.mean_prediction_error, Style::Points),
        mean_turnover: or_none(
            mean(t.rows.iter().filter_map(|r| r.turnover)),
            Style::Weight,
        ),
        final_wealth: format::number(t.final_wealth, 4),
        total_return: pct(t.final_wealth - 1.0, Style::Return),
    }
}

/// The zone as a word; the word, not the badge colour, is what the reader relies on.
pub fn zone_word(z: Zone) -> (&'static str, &'static str) {
    match z {
        Zone::Green => ("Green", "green"),
        Zone::Yellow => ("Yellow", "yellow"),
        Zone::Red => ("Red", "red"),
    }
}

type DailyPart = (Vec<DailyRow>, Option<String>, Option<String>);

fn daily(r: &RunResult, b: &Backtest) -> DailyPart {
    if !r.config.analysis.daily_var_check {
        return (vec![], None, Some("The daily 99% VaR traffic-light test is switched off in the config (analysis.daily_var_check: false).".into()));
    }
    let Some(any) = b.tracks.iter().find_map(|t| t.daily.as_ref()) else {
        return (
            vec![],
            None,
            Some(format!(
                "The daily 99% VaR traffic-light test could not be run: it needs {DAILY_OBSERVATIONS} daily observations, each with a model's weights in force and a full look-back before it."
            )),
        );
    };
    let window = format!("{} to {}", any.start, any.end);
    (
        b.tracks
            .iter()
            .map(|t| daily_row(t.model, t.daily.as_ref()))
            .collect(),
        Some(window),
        None,
    )
}

fn daily_row(model: &str, d: Option<&DailyCheck>) -> DailyRow {
    let Some(d) = d else {
        return DailyRow {
            head: head(look(model)),
            observations: NONE.into(),
            exceptions: NONE.into(),
            expected: NONE.into(),
            probability: NONE.into(),
            zone: "not run".into(),
            zone_key: "none",
        };
    };
    let (word, key) = zone_word(d.zone);
    DailyRow {
        head: head(look(model)),
        observations: format::count(d.observations),
        exceptions: d.exceptions.to_string(),
        expected: format::number((1.0 - DAILY_LEVEL) * d.observations as f64, 1),
        probability: format::probability(d.cumulative_probability),
        zone: word.into(),
        zone_key: key,
    }
}
