//! The walk-forward backtest part of "Further analysis": its tables (`further.backtest` in
//! `/data/report.json`: each model's VaR exceptions with the Kupiec and Christoffersen tests, its
//! out-of-sample returns, the daily 99% VaR traffic light) and its charts (`backtest-months.svg`, realised
//! return against the predicted VaR each month, and `backtest-wealth.svg`, cumulative wealth).
//!
//! Reads [`RunResult::analysis`]'s backtest and the config; computes nothing beyond a model's mean predicted
//! and realised return and mean turnover over the backtest months.

use crate::analysis::backtest::{
    Backtest, DAILY_LEVEL, DAILY_OBSERVATIONS, DailyCheck, Track, TrackRow,
};
use crate::analysis::vartest::{LrTest, Zone};
use crate::report::draw::{
    Area, Cartesian, Chart, Drawn, GRID, INK, MUTED, colour, draw, font, legend, mark, padded,
    tick, tick_decimals,
};
use crate::report::format::{self, NONE, Style, pct, sentence};
use crate::report::view::{Head, Identity, Pair, identity};
use crate::run::RunResult;
use chrono::Datelike;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

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
    /// How wealth and returns treat transaction costs, as the end of a sentence.
    pub costs: String,
    /// Whether the scores carry active risk against the policy benchmark (a policy is configured).
    pub has_active: bool,
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
    /// Transaction costs paid over the backtest, as a percentage of the starting wealth.
    pub total_cost: String,
    /// Realised active risk against the policy benchmark (None without a policy).
    pub active: Option<ActiveScore>,
}

/// A model's realised active return and ex-post tracking error against the policy benchmark.
#[derive(Serialize)]
pub struct ActiveScore {
    pub months: String,
    pub mean_active: String,
    pub tracking_error: String,
    pub tracking_error_annualised: String,
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

/// How the backtest's wealth treats costs: net of each rebalance's cost when rates are configured (the
/// backtest charges them from the drifted weights), else before costs.
fn costs_phrase(r: &RunResult) -> String {
    if r.config.costs.any() {
        "net of each month's transaction cost (the configured one-way rates on the trade from the drifted weights)".into()
    } else {
        "before costs (no transaction cost rates are configured)".into()
    }
}

/// The backtest's tables, or the sentence that says why there are none.
pub fn show(r: &RunResult) -> Result<BacktestShow, String> {
    let years = r.config.analysis.backtest_years;
    if r.scenarios.from_file() {
        return Err(crate::report::text::from_file_absent(
            r,
            "The walk-forward backtest",
        ));
    }
    let b = r.analysis.backtest.as_ref().ok_or_else(|| if years == 0 {
        "The walk-forward backtest was not run: it is switched off in the config (analysis.backtest_years: 0). No out-of-sample evidence on the models is shown.".to_string()
    } else {
        format!("The walk-forward backtest was not run: no pair of consecutive month-ends of the price history falls within the last {years} year(s) before the as-of date.")
    })?;
    let level = format::level(b.confidence);
    let (daily, daily_window, daily_absent) = daily(r, b);
    Ok(BacktestShow {
        costs: costs_phrase(r),
        has_active: b.benchmark.is_some(),
        facts: facts(r, b),
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

fn facts(r: &RunResult, b: &Backtest) -> Vec<Pair> {
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
        head: Head::of(identity(t.model)),
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
        total_cost: pct(t.total_cost, Style::Weight),
        active: t
            .rows
            .iter()
            .any(|r| r.active_return.is_some())
            .then(|| active_score(t)),
    }
}

/// The active figures as printed; dashes where fewer than two months allow a standard deviation.
fn active_score(t: &Track) -> ActiveScore {
    let months = t.rows.iter().filter(|r| r.active_return.is_some()).count();
    let e = t.ex_post.as_ref();
    let or_none = |x: Option<f64>, style: Style| x.map_or(NONE.into(), |v| pct(v, style));
    ActiveScore {
        months: format::count(months),
        mean_active: or_none(e.map(|e| e.mean_active_return), Style::Return),
        tracking_error: or_none(e.map(|e| e.tracking_error), Style::Weight),
        tracking_error_annualised: or_none(e.map(|e| e.tracking_error_annualised), Style::Weight),
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
    let freq = r.config.scenarios.frequency;
    if freq != crate::config::Frequency::Daily {
        return (
            vec![],
            None,
            Some(format!(
                "The daily 99% VaR traffic-light test needs daily observations; scenarios here are built on {}-end observations (scenarios.frequency: {}), so it is not run.",
                freq.period(),
                freq.word()
            )),
        );
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
            head: Head::of(identity(model)),
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
        head: Head::of(identity(model)),
        observations: format::count(d.observations),
        exceptions: d.exceptions.to_string(),
        expected: format::number((1.0 - DAILY_LEVEL) * d.observations as f64, 1),
        probability: format::probability(d.cumulative_probability),
        zone: word.into(),
        zone_key: key,
    }
}

// ---------------------------------------------------------------------------------------------------------
// Charts

/// Realised return in a month without an exception.
const CALM: RGBColor = RGBColor(0xc4, 0xc8, 0xcd);

/// `backtest-months.svg` and `backtest-wealth.svg`, drawn exactly when [`show`] has a backtest to print.
pub fn charts(r: &RunResult) -> crate::error::Result<Vec<Chart>> {
    let Some(b) = &r.analysis.backtest else {
        return Ok(vec![]);
    };
    Ok(vec![
        draw("backtest-months.svg", months_height(b.tracks.len()), |a| {
            months(a, b)
        })?,
        draw("backtest-wealth.svg", 300, |a| wealth(a, b))?,
    ])
}

/// The identities of the backtest's models, in track order.
fn identities(b: &Backtest) -> Vec<&'static Identity> {
    b.tracks.iter().map(|t| identity(t.model)).collect()
}

/// One panel per model: each month's realised return as a bar (in the model's colour, with its marker,
/// when the loss exceeds the predicted VaR), the predicted expected return as a tick across the bar, and
/// the predicted VaR as a step line drawn as a return (−VaR). The panels share one vertical scale.
fn months(area: &Area, b: &Backtest) -> Drawn {
    let (y0, y1) = padded(
        b.tracks
            .iter()
            .flat_map(|t| {
                t.rows.iter().flat_map(|r| {
                    [
                        r.realised_return,
                        r.predicted_var.map(|v| -v),
                        r.predicted_return,
                    ]
                    .into_iter()
                    .flatten()
                })
            })
            .map(|v| v * 100.0),
        0.08,
        true,
    );
    // Room below the lowest bar for the exception markers drawn under it.
    let y0 = y0 - 0.1 * (y1 - y0);
    months_legend(area, &identities(b))?;
    let mut rest = area.margin(MONTHS_LEGEND as u32, 0, 0, 0);
    for (i, t) in b.tracks.iter().enumerate() {
        let bottom = i + 1 == b.tracks.len();
        let (panel, below) = rest.split_vertically(if bottom { PANEL + 46 } else { PANEL });
        month_panel(area, &panel, t, (y0, y1), bottom)?;
        rest = below;
    }
    Ok(())
}

/// Height of the legend band above the panels, and of one panel (the bottom one has the axis below it).
const MONTHS_LEGEND: i32 = 44;
const PANEL: u32 = 150;

/// Height of the whole monthly chart for `panels` models.
pub fn months_height(panels: usize) -> u32 {
    MONTHS_LEGEND as u32 + PANEL * panels as u32 + 46 + 6
}

/// Draws one model's panel: the chart is laid out in `panel`, but drawn on `root`, because plotters
/// reports backend coordinates of the whole canvas.
fn month_panel(root: &Area, panel: &Area, t: &Track, ys: (f64, f64), bottom: bool) -> Drawn {
    let n = t.rows.len();
    let id = identity(t.model);
    let chart = panel_axes(panel, n, ys, bottom)?;
    year_ticks(root, &chart, t, ys, bottom)?;
    let zero = (
        chart.backend_coord(&(0.0, 0.0)),
        chart.backend_coord(&(n as f64, 0.0)),
    );
    root.draw(&PathElement::new(
        vec![zero.0, zero.1],
        MUTED.stroke_width(1),
    ))?;
    for (i, row) in t.rows.iter().enumerate() {
        month_bar(root, &chart, i as f64, row, id)?;
    }
    let var: Vec<(i32, i32)> = t
        .rows
        .iter()
        .enumerate()
        .filter_map(|(i, r)| r.predicted_var.map(|v| (i, -v * 100.0)))
        .flat_map(|(i, v)| [(i as f64, v), (i as f64 + 1.0, v)])
        .map(|p| chart.backend_coord(&p))
        .collect();
    root.draw(&PathElement::new(var, colour(id).stroke_width(2)))?;
    panel_title(root, &chart, t, ys.1)
}

/// A panel's plot box: one slot per month across, return in percent up; the month axis is described under
/// the bottom panel only.
fn panel_axes<'a, 'b>(
    panel: &'a Area<'b>,
    months: usize,
    (y0, y1): (f64, f64),
    bottom: bool,
) -> std::result::Result<Cartesian<'a, 'b>, Box<dyn std::error::Error>> {
    let mut chart = ChartBuilder::on(panel)
        .margin(10)
        .margin_top(26)
        .x_label_area_size(if bottom { 46 } else { 4 })
        .y_label_area_size(64)
        .build_cartesian_2d(0.0..months.max(1) as f64, y0..y1)?;
    let dy = tick_decimals(y1 - y0);
    chart
        .configure_mesh()
        .disable_x_mesh()
        .x_labels(0)
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.0))
        .y_label_formatter(&|v| tick(*v, dy))
        .y_labels(5)
        .y_desc("Return (%)")
        .x_desc(if bottom {
            "Month-end of the decision (each portfolio held to the next month-end)"
        } else {
            ""
        })
        .draw()?;
    Ok(chart)
}

/// The panel's title above its top-left corner: the model's marker, its exceptions against the expected.
fn panel_title(root: &Area, chart: &Cartesian, t: &Track, y1: f64) -> Drawn {
    let id = identity(t.model);
    let title = format!(
        "{}: {} exception(s) in {} months, {} expected",
        id.label,
        t.exceptions,
        t.observations,
        format::number(t.expected_exceptions, 1)
    );
    let (left, top) = chart.backend_coord(&(0.0, y1));
    mark(root, (left + 7, top - 13), id)?;
    root.draw(&Text::new(
        title,
        (left + 19, top - 13),
        font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    Ok(())
}

fn month_bar(area: &Area, chart: &Cartesian, i: f64, row: &TrackRow, id: &Identity) -> Drawn {
    if let Some(ret) = row.realised_return {
        let hit = row.exception == Some(true);
        let (a, b) = (
            chart.backend_coord(&(i + 0.15, 0.0)),
            chart.backend_coord(&(i + 0.85, ret * 100.0)),
        );
        area.draw(&Rectangle::new(
            [a, b],
            if hit {
                colour(id).filled()
            } else {
                CALM.filled()
            },
        ))?;
        if hit {
            mark(area, ((a.0 + b.0) / 2, b.1 + 10), id)?;
        }
    }
    if let Some(p) = row.predicted_return {
        let (a, b) = (
            chart.backend_coord(&(i + 0.05, p * 100.0)),
            chart.backend_coord(&(i + 0.95, p * 100.0)),
        );
        area.draw(&PathElement::new(vec![a, b], INK.stroke_width(2)))?;
    }
    Ok(())
}

/// Two lines of legend: what the bars, the tick and the step line are; exceptions and the VaR line take
/// each model's colour, so their samples show all the models' colours.
fn months_legend(area: &Area, ids: &[&Identity]) -> Drawn {
    let text = |area: &Area, s: &str, at: (i32, i32)| {
        area.draw(&Text::new(
            s.to_string(),
            at,
            font(12.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))
    };
    let (c1, c2, r1, r2) = (80, 360, 12, 32);
    area.draw(&Rectangle::new(
        [(c1 + 6, r1 - 6), (c1 + 18, r1 + 6)],
        CALM.filled(),
    ))?;
    text(area, "Realised return of the month", (c1 + 34, r1))?;
    for (j, id) in ids.iter().enumerate() {
        let x = c2 + 8 * j as i32;
        area.draw(&Rectangle::new(
            [(x, r1 - 6), (x + 6, r1 + 6)],
            colour(id).filled(),
        ))?;
        let y = r2 - 4 + 4 * j as i32;
        area.draw(&PathElement::new(
            vec![(c2, y), (c2 + 24, y)],
            colour(id).stroke_width(2),
        ))?;
    }
    text(
        area,
        "Exception: loss beyond the predicted VaR",
        (c2 + 34, r1),
    )?;
    area.draw(&PathElement::new(
        vec![(c1, r2), (c1 + 26, r2)],
        INK.stroke_width(2),
    ))?;
    text(area, "Predicted expected return", (c1 + 34, r2))?;
    text(
        area,
        "Predicted VaR, drawn as a return (\u{2212}VaR)",
        (c2 + 34, r2),
    )?;
    Ok(())
}

/// A light vertical line at each year-end decision date, labelled under the bottom panel only.
fn year_ticks(
    area: &Area,
    chart: &Cartesian,
    t: &Track,
    (y0, y1): (f64, f64),
    bottom: bool,
) -> Drawn {
    for (i, row) in t
        .rows
        .iter()
        .enumerate()
        .filter(|(_, r)| r.date.month() == 12)
    {
        let (a, b) = (
            chart.backend_coord(&(i as f64, y0)),
            chart.backend_coord(&(i as f64, y1)),
        );
        area.draw(&PathElement::new(vec![a, b], GRID.stroke_width(1)))?;
        if bottom {
            area.draw(&Text::new(
                row.date.format("%b %Y").to_string(),
                (a.0, a.1 + 8),
                font(12.0).pos(Pos::new(HPos::Center, VPos::Top)),
            ))?;
        }
    }
    Ok(())
}

/// Wealth of 1 invested at the first decision date and rebalanced into each month's portfolio, per model;
/// markers every twelve months repeat the model's shape so the lines can be told apart without colour.
fn wealth(area: &Area, b: &Backtest) -> Drawn {
    let paths = wealth_paths(b);
    let n = b.tracks.first().map_or(0, |t| t.rows.len());
    let (y0, y1) = padded(
        paths.iter().flatten().map(|p| p.1).chain([1.0]),
        0.08,
        false,
    );
    let mut chart = wealth_axes(area, n, (y0, y1))?;
    if let Some(t) = b.tracks.first() {
        year_ticks(area, &chart, t, (y0, y1), true)?;
    }
    chart.draw_series(DashedLineSeries::new(
        vec![(0.0, 1.0), (n as f64, 1.0)],
        5,
        4,
        MUTED.stroke_width(1),
    ))?;
    let ids = identities(b);
    for (id, path) in ids.iter().zip(&paths) {
        chart.draw_series(LineSeries::new(
            path.iter().copied(),
            colour(id).stroke_width(2),
        ))?;
        for (k, p) in path.iter().enumerate() {
            if k % 12 == 0 || k + 1 == path.len() {
                mark(area, chart.backend_coord(p), id)?;
            }
        }
    }
    legend(area, &ids, (80, 14))
}

/// Each model's wealth path: 1 before the first month, then the wealth after each month.
fn wealth_paths(b: &Backtest) -> Vec<Vec<(f64, f64)>> {
    b.tracks
        .iter()
        .map(|t| {
            std::iter::once((0.0, 1.0))
                .chain(
                    t.rows
                        .iter()
                        .enumerate()
                        .map(|(i, r)| (i as f64 + 1.0, r.wealth)),
                )
                .collect()
        })
        .collect()
}

/// The wealth chart's plot box: months across, wealth up.
fn wealth_axes<'a, 'b>(
    area: &'a Area<'b>,
    months: usize,
    (y0, y1): (f64, f64),
) -> std::result::Result<Cartesian<'a, 'b>, Box<dyn std::error::Error>> {
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(34)
        .x_label_area_size(46)
        .y_label_area_size(64)
        .build_cartesian_2d(0.0..months.max(1) as f64, y0..y1)?;
    chart
        .configure_mesh()
        .disable_x_mesh()
        .x_labels(0)
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.5))
        .y_label_formatter(&|v| format::number(*v, 2))
        .y_desc("Wealth (1 at the first decision date)")
        .x_desc("Month-end")
        .draw()?;
    Ok(chart)
}
