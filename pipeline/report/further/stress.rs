//! The stress part of "Further analysis": its tables (`further.stress` in `/data/report.json`: P&L of every
//! portfolio under every shock, each portfolio's worst shock and its split by class, the loss-limit
//! breaches) and its chart (`stress.svg`, one bar per portfolio and shock, the loss limit dashed).
//!
//! Reads [`RunResult::analysis`]'s shocks and stress results and the config's loss limit; computes nothing.

use crate::analysis::stress::{Shock, StressResult};
use crate::report::draw::{
    Area, Cartesian, Chart, Drawn, INK, MUTED, bar_frame, bars, bars_height, draw, font, legend,
    muted, padded, ry,
};
use crate::report::format::{self, NONE, Style, pct, sentence, shortlist};
use crate::report::money;
use crate::report::view::{Head, Identity, Portfolio, class_order, stress_result};
use crate::run::RunResult;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use serde::Serialize;

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
    /// The P&L in the base currency, signed, digits only; `null` without a fund value or a portfolio.
    pub pnl_money: Option<String>,
    pub worst: bool,
    pub breach: bool,
}

/// A portfolio's worst shock.
#[derive(Serialize)]
pub struct WorstCell {
    pub shock: String,
    pub pnl: String,
    pub loss: String,
    /// The P&L in the base currency, signed, digits only; `null` without a fund value or a portfolio.
    pub pnl_money: Option<String>,
}

/// One asset class's part of each portfolio's P&L in that portfolio's worst shock.
#[derive(Serialize)]
pub struct StressClassRow {
    pub class: String,
    pub cells: Vec<String>,
    /// The same in the base currency, signed, digits only; `null` without a fund value or a portfolio.
    pub money: Vec<Option<String>>,
}

/// A portfolio's worst stress loss (a positive number is a loss) and the shock that causes it.
pub fn worst_stress<'a>(r: &'a RunResult, key: &str) -> Option<(f64, &'a str)> {
    let s = stress_result(r, key)?;
    let shock = r.analysis.shocks.get(s.worst)?;
    Some((-s.pnl[s.worst], shock.name.as_str()))
}

/// The stress tables of the portfolios `shown`, or the sentence that says why there are none.
pub fn show(r: &RunResult, shown: &[Portfolio]) -> Result<StressShow, String> {
    let a = &r.analysis;
    if a.shocks.is_empty() {
        return Err(no_shocks(r));
    }
    if a.stress.is_empty() {
        return Err("No stress result: there are no current holdings and no model has a solution, so there is no portfolio to stress.".into());
    }
    let results: Vec<Option<&StressResult>> =
        shown.iter().map(|v| stress_result(r, v.key)).collect();
    Ok(StressShow {
        heads: shown.iter().map(|v| Head::of(v.identity)).collect(),
        loss_limit: r.config.stress_loss_limit.map(|l| pct(l, Style::Loss)),
        defined: a.shocks.iter().filter(|s| s.kind == "defined").count(),
        historical: a.shocks.iter().filter(|s| s.kind == "historical").count(),
        reference: if r.data.holdings.is_some() {
            "the current holdings".into()
        } else {
            "equal weights (no holdings were given)".into()
        },
        horizon: r.config.scenarios.horizon,
        rows: rows(r, &results),
        worst: results.iter().map(|res| worst_cell(r, *res)).collect(),
        classes: stress_classes(r, &results),
        breaches: shown
            .iter()
            .zip(&results)
            .filter_map(|(v, res)| breach_sentence(r, v.identity.label, (*res)?))
            .collect(),
    })
}

/// One row per shock, one cell per portfolio (a dash for a portfolio that was not stressed).
fn rows(r: &RunResult, results: &[Option<&StressResult>]) -> Vec<StressRow> {
    r.analysis
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
                        pnl_money: money::amount(money::fund(r), x.pnl[k], Style::Return),
                        worst: x.worst == k,
                        breach: x.breaches.contains(&k),
                    },
                    None => StressCell {
                        pnl: NONE.into(),
                        pnl_money: None,
                        worst: false,
                        breach: false,
                    },
                })
                .collect(),
        })
        .collect()
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
            "the price history is too short for a {}-{} historical window",
            c.scenarios.horizon,
            c.scenarios.frequency.period()
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

fn worst_cell(r: &RunResult, res: Option<&StressResult>) -> WorstCell {
    match res.and_then(|x| r.analysis.shocks.get(x.worst).map(|s| (x, s))) {
        Some((x, s)) => WorstCell {
            shock: s.name.clone(),
            pnl: pct(x.pnl[x.worst], Style::Return),
            loss: pct(-x.pnl[x.worst], Style::Loss),
            pnl_money: money::amount(money::fund(r), x.pnl[x.worst], Style::Return),
        },
        None => WorstCell {
            shock: NONE.into(),
            pnl: NONE.into(),
            loss: NONE.into(),
            pnl_money: None,
        },
    }
}

/// Contributions by class to each portfolio's worst shock, classes in the order of the asset list.
fn stress_classes(r: &RunResult, results: &[Option<&StressResult>]) -> Vec<StressClassRow> {
    class_order(r)
        .into_iter()
        .map(|class| {
            let parts: Vec<Option<f64>> = results
                .iter()
                .map(|res| worst_class_part(*res, &class))
                .collect();
            StressClassRow {
                cells: parts
                    .iter()
                    .map(|v| v.map_or_else(|| NONE.into(), |v| pct(v, Style::Return)))
                    .collect(),
                money: parts
                    .iter()
                    .map(|v| money::amount(money::fund(r), (*v)?, Style::Return))
                    .collect(),
                class: format::title(&class),
            }
        })
        .collect()
}

/// A class's part of a portfolio's P&L in that portfolio's worst shock.
fn worst_class_part(res: Option<&StressResult>, class: &str) -> Option<f64> {
    let x = res?;
    x.by_class
        .get(x.worst)?
        .iter()
        .find(|(c, _)| c == class)
        .map(|(_, v)| *v)
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
                money::pct_then_amount(money::fund(r), res.pnl[k], Style::Return)
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
// Chart

/// Width of the shock names at the left of the stress chart.
const STRESS_LABELS: u32 = 236;

/// `stress.svg`, drawn exactly when [`show`] has shocks and a stressed portfolio among `shown`.
pub fn chart(r: &RunResult, shown: &[Portfolio]) -> crate::error::Result<Option<Chart>> {
    let stressed: Vec<&Identity> = shown
        .iter()
        .filter(|v| stress_result(r, v.key).is_some())
        .map(|v| v.identity)
        .collect();
    if r.analysis.shocks.is_empty() || stressed.is_empty() {
        return Ok(None);
    }
    let height = bars_height(r.analysis.shocks.len(), stressed.len())
        .max(80 + 34 * r.analysis.shocks.len() as u32);
    draw("stress.svg", height, |a| stress(a, r, &stressed)).map(Some)
}

/// P&L of every portfolio under every shock, one bar per portfolio; the loss limit as a dashed line.
fn stress(area: &Area, r: &RunResult, stressed: &[&Identity]) -> Drawn {
    let a = &r.analysis;
    let values: Vec<Vec<f64>> = (0..a.shocks.len())
        .map(|k| {
            stressed
                .iter()
                .map(|id| stress_result(r, id.key).map_or(0.0, |s| s.pnl[k] * 100.0))
                .collect()
        })
        .collect();
    let limit = r.config.stress_loss_limit.map(|l| -l * 100.0);
    let (lo, hi) = padded(values.iter().flatten().copied().chain(limit), 0.06, true);
    let xs = (lo, hi.max(0.0));
    let desc = "P&L under the shock (% of portfolio value; negative is a loss)";
    let mut chart = bar_frame(area, xs, a.shocks.len(), STRESS_LABELS, 36, desc)?;
    let n = a.shocks.len();
    for (k, s) in a.shocks.iter().enumerate() {
        bars(area, &chart, stressed, &values[k], (k, n))?;
        wrapped_label(area, &chart, xs, (k, n), &s.name)?;
    }
    let (top, bottom) = (
        chart.backend_coord(&(0.0, n as f64)),
        chart.backend_coord(&(0.0, 0.0)),
    );
    area.draw(&PathElement::new(vec![top, bottom], INK.stroke_width(1)))?;
    if let Some(x) = limit {
        chart.draw_series(DashedLineSeries::new(
            vec![(x, 0.0), (x, n as f64)],
            5,
            4,
            MUTED.stroke_width(1),
        ))?;
        let at = chart.backend_coord(&(x, n as f64));
        area.draw(&Text::new(
            "loss limit",
            (at.0, at.1 - 3),
            muted(11.5).pos(Pos::new(HPos::Center, VPos::Bottom)),
        ))?;
    }
    legend(area, stressed, (STRESS_LABELS as i32, 14))
}

/// A row label in at most two lines, right-aligned against the plot's left edge.
fn wrapped_label(
    area: &Area,
    chart: &Cartesian,
    xs: (f64, f64),
    (i, n): (usize, usize),
    text: &str,
) -> Drawn {
    let lines = wrap(text, 40);
    let (px, py) = chart.backend_coord(&(xs.0, ry(n, i, 0.5)));
    let first = py - 8 * (lines.len() as i32 - 1);
    for (j, line) in lines.iter().enumerate() {
        area.draw(&Text::new(
            line.clone(),
            (px - 8, first + 16 * j as i32),
            font(12.0).pos(Pos::new(HPos::Right, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// `text` in one line if it fits in about `width` characters, else in two: before a parenthesis (a
/// window's dates) when both parts fit, otherwise at the space nearest the middle, so neither line is a
/// stub. A part still too long ends in an ellipsis (the table carries the full name).
fn wrap(text: &str, width: usize) -> Vec<String> {
    let len = |s: &str| s.chars().count();
    if len(text) <= width {
        return vec![text.to_string()];
    }
    let paren = text
        .find(" (")
        .filter(|&i| len(&text[..i]) <= width && len(&text[i + 1..]) <= width);
    let middle = || {
        text.char_indices()
            .filter(|(_, c)| *c == ' ')
            .map(|(i, _)| i)
            // On a tie, the longer first line.
            .min_by_key(|&i| {
                (
                    len(&text[..i]).abs_diff(len(&text[i + 1..])),
                    std::cmp::Reverse(i),
                )
            })
    };
    let Some(at) = paren.or_else(middle) else {
        return vec![clip(text, width)];
    };
    vec![clip(&text[..at], width), clip(&text[at + 1..], width)]
}

fn clip(text: &str, width: usize) -> String {
    if text.chars().count() <= width {
        return text.to_string();
    }
    let mut cut: String = text
        .chars()
        .take(width.saturating_sub(1))
        .collect::<String>()
        .trim_end()
        .to_string();
    cut.push('\u{2026}');
    cut
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn long_labels_wrap_into_two_balanced_lines() {
        assert_eq!(wrap("Property slump", 40), vec!["Property slump"]);
        assert_eq!(
            wrap("Equity crash with a flight to government bonds", 40),
            vec!["Equity crash with a flight", "to government bonds"]
        );
        assert_eq!(
            wrap("Worst window #1 (2019-08-30 to 2019-09-30)", 40),
            vec!["Worst window #1", "(2019-08-30 to 2019-09-30)"]
        );
        let cut = wrap("abcdefghijklmnopqrstuvwxyz abcdefghijklmnopqrstuvwxyz", 20);
        assert_eq!(cut.len(), 2);
        assert!(
            cut.iter()
                .all(|l| l.ends_with('\u{2026}') && l.chars().count() <= 20),
            "{cut:?}"
        );
    }
}
