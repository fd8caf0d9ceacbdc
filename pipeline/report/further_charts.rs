//! The charts of the "Further analysis" section: the efficient frontier with the max-ratio ray, P&L per
//! stress shock, and the walk-forward backtest (realised return against the predicted VaR each month, and
//! cumulative wealth).
//!
//! They share the palette, markers, type and axis conventions of [`super::charts`]: the same portfolio has
//! the same colour and marker as everywhere in the pack, and every axis names its unit. A chart is drawn
//! exactly when [`super::further`] shows its part, so the template can rely on it being there.

use super::charts::{
    Area, Cartesian, Chart, Drawn, GRID, INK, MUTED, bar_frame, bars, bars_height, draw, font,
    legend, marker, muted, padded, ry, text_width, tick, tick_decimals,
};
use super::charts::{Look, look};
use super::data::View;
use super::format;
use super::further::{Solved, max_ratio_point, result_of, solved_points};
use crate::analysis::backtest::{Backtest, Track, TrackRow};
use crate::error::Result;
use crate::models::Family;
use crate::run::RunResult;
use chrono::Datelike;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// The frontier line: a mid grey, so it reads as the backdrop the portfolios sit on.
const FRONTIER: RGBColor = RGBColor(0x8a, 0x90, 0x99);
/// Realised return in a month without an exception.
const CALM: RGBColor = RGBColor(0xc4, 0xc8, 0xcd);

/// The section's charts that have data: `frontier.svg`, `stress.svg`, `backtest-months.svg`,
/// `backtest-wealth.svg`.
pub fn all(r: &RunResult, views: &[View]) -> Result<Vec<Chart>> {
    let mut out = Vec::new();
    let pts = r
        .analysis
        .frontier
        .as_ref()
        .map(solved_points)
        .unwrap_or_default();
    if !pts.is_empty() {
        let shown: Vec<&View> = views.iter().filter(|v| v.profile.is_some()).collect();
        out.push(draw("frontier.svg", 330, |a| frontier(a, r, &shown, &pts))?);
    }
    let stressed: Vec<&View> = views
        .iter()
        .filter(|v| result_of(r, v.key).is_some())
        .collect();
    if !r.analysis.shocks.is_empty() && !stressed.is_empty() {
        let height = bars_height(r.analysis.shocks.len(), stressed.len())
            .max(80 + 34 * r.analysis.shocks.len() as u32);
        out.push(draw("stress.svg", height, |a| stress(a, r, &stressed))?);
    }
    if let Some(b) = &r.analysis.backtest {
        out.push(draw(
            "backtest-months.svg",
            months_height(b.tracks.len()),
            |a| months(a, b),
        )?);
        out.push(draw("backtest-wealth.svg", 300, |a| wealth(a, b))?);
    }
    Ok(out)
}

// ---------------------------------------------------------------------------------------------------------
// Efficient frontier

/// Expected return against CVaR along the frontier, the portfolios marked, and the ray from the origin
/// through the max-ratio portfolio (slope = its return per unit of CVaR), which touches the frontier there.
fn frontier(area: &Area, r: &RunResult, views: &[&View], pts: &[Solved]) -> Drawn {
    let c = r.config.confidence;
    let line: Vec<(f64, f64)> = pts
        .iter()
        .map(|p| (p.cvar * 100.0, p.expected_return * 100.0))
        .collect();
    let marks: Vec<(f64, f64)> = views
        .iter()
        .map(|v| {
            v.profile
                .map(|p| (p.at(c).cvar * 100.0, p.expected_return * 100.0))
                .unwrap()
        })
        .collect();
    let (x0, x1) = padded(line.iter().chain(&marks).map(|p| p.0), 0.08, false);
    let (y0, y1) = padded(line.iter().chain(&marks).map(|p| p.1), 0.14, false);
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(34)
        .x_label_area_size(46)
        .y_label_area_size(64)
        .build_cartesian_2d(x0..x1, y0..y1)?;
    let (dx, dy) = (tick_decimals(x1 - x0), tick_decimals(y1 - y0));
    chart
        .configure_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.5))
        .x_label_formatter(&|v| tick(*v, dx))
        .y_label_formatter(&|v| tick(*v, dy))
        .x_desc(format!(
            "CVaR {} over one horizon (% loss of portfolio value)",
            format::level(c)
        ))
        .y_desc("Expected return over one horizon (%)")
        .draw()?;
    let ray = max_ratio_point(r)
        .filter(|(cv, _)| *cv > 0.0)
        .and_then(|(cv, er)| clip_ray(er / cv, (x0, x1), (y0, y1)));
    if let Some(seg) = ray {
        chart.draw_series(DashedLineSeries::new(
            seg.to_vec(),
            7,
            5,
            look(Family::MaxRatio.name()).rgb.stroke_width(2),
        ))?;
    }
    chart.draw_series(LineSeries::new(
        line.iter().copied(),
        FRONTIER.stroke_width(2),
    ))?;
    for p in &line {
        area.draw(&Circle::new(chart.backend_coord(p), 3, FRONTIER.filled()))?;
    }
    for (v, p) in views.iter().zip(&marks) {
        let at = chart.backend_coord(p);
        marker(area, at, v.look.marker, v.look.rgb)?;
        area.draw(&Text::new(
            v.look.label,
            (at.0 + 11, at.1 + 12),
            font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    frontier_legend(area, ray.is_some())
}

/// The part of the line y = k·x inside the plot box, if any: the ray from the origin clipped to the axes.
fn clip_ray(k: f64, (x0, x1): (f64, f64), (y0, y1): (f64, f64)) -> Option<[(f64, f64); 2]> {
    let (lo, hi) = if k > 0.0 {
        (x0.max(y0 / k), x1.min(y1 / k))
    } else if k < 0.0 {
        (x0.max(y1 / k), x1.min(y0 / k))
    } else if (y0..=y1).contains(&0.0) {
        (x0, x1)
    } else {
        return None;
    };
    (lo < hi).then_some([(lo, k * lo), (hi, k * hi)])
}

fn frontier_legend(area: &Area, ray: bool) -> Drawn {
    let y = 14;
    area.draw(&PathElement::new(
        vec![(80, y), (104, y)],
        FRONTIER.stroke_width(2),
    ))?;
    area.draw(&Circle::new((92, y), 3, FRONTIER.filled()))?;
    area.draw(&Text::new(
        "Efficient frontier",
        (110, y),
        font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    if ray {
        let x = 110 + text_width("Efficient frontier", 13.0) + 30;
        let gold = look(Family::MaxRatio.name()).rgb;
        area.draw(&PathElement::new(
            vec![(x, y), (x + 9, y)],
            gold.stroke_width(2),
        ))?;
        area.draw(&PathElement::new(
            vec![(x + 14, y), (x + 24, y)],
            gold.stroke_width(2),
        ))?;
        area.draw(&Text::new(
            "Ray from the origin through Max ratio",
            (x + 30, y),
            font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------------------
// Stress set

/// Width of the shock names at the left of the stress chart.
const STRESS_LABELS: u32 = 236;

/// P&L of every portfolio under every shock, one bar per portfolio; the loss limit as a dashed line.
fn stress(area: &Area, r: &RunResult, views: &[&View]) -> Drawn {
    let a = &r.analysis;
    let values: Vec<Vec<f64>> = (0..a.shocks.len())
        .map(|k| {
            views
                .iter()
                .map(|v| result_of(r, v.key).map_or(0.0, |s| s.pnl[k] * 100.0))
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
        bars(area, &chart, views, &values[k], (k, n))?;
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
    legend(area, views, (STRESS_LABELS as i32, 14))
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

// ---------------------------------------------------------------------------------------------------------
// Walk-forward backtest

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
    let looks: Vec<&Look> = b.tracks.iter().map(|t| look(t.model)).collect();
    months_legend(area, &looks)?;
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
fn month_panel(root: &Area, panel: &Area, t: &Track, (y0, y1): (f64, f64), bottom: bool) -> Drawn {
    let n = t.rows.len();
    let look = look(t.model);
    let mut chart = ChartBuilder::on(panel)
        .margin(10)
        .margin_top(26)
        .x_label_area_size(if bottom { 46 } else { 4 })
        .y_label_area_size(64)
        .build_cartesian_2d(0.0..n.max(1) as f64, y0..y1)?;
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
    year_ticks(root, &chart, t, (y0, y1), bottom)?;
    let zero = (
        chart.backend_coord(&(0.0, 0.0)),
        chart.backend_coord(&(n as f64, 0.0)),
    );
    root.draw(&PathElement::new(
        vec![zero.0, zero.1],
        MUTED.stroke_width(1),
    ))?;
    for (i, row) in t.rows.iter().enumerate() {
        month_bar(root, &chart, i as f64, row, look)?;
    }
    let var: Vec<(i32, i32)> = t
        .rows
        .iter()
        .enumerate()
        .filter_map(|(i, r)| r.predicted_var.map(|v| (i, -v * 100.0)))
        .flat_map(|(i, v)| [(i as f64, v), (i as f64 + 1.0, v)])
        .map(|p| chart.backend_coord(&p))
        .collect();
    root.draw(&PathElement::new(var, look.rgb.stroke_width(2)))?;
    let title = format!(
        "{}: {} exception(s) in {} months, {} expected",
        look.label,
        t.exceptions,
        t.observations,
        format::number(t.expected_exceptions, 1)
    );
    let (left, top) = chart.backend_coord(&(0.0, y1));
    marker(root, (left + 7, top - 13), look.marker, look.rgb)?;
    root.draw(&Text::new(
        title,
        (left + 19, top - 13),
        font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    Ok(())
}

fn month_bar(area: &Area, chart: &Cartesian, i: f64, row: &TrackRow, look: &Look) -> Drawn {
    if let Some(ret) = row.realised_return {
        let hit = row.exception == Some(true);
        let (a, b) = (
            chart.backend_coord(&(i + 0.15, 0.0)),
            chart.backend_coord(&(i + 0.85, ret * 100.0)),
        );
        area.draw(&Rectangle::new(
            [a, b],
            if hit {
                look.rgb.filled()
            } else {
                CALM.filled()
            },
        ))?;
        if hit {
            marker(area, ((a.0 + b.0) / 2, b.1 + 10), look.marker, look.rgb)?;
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
fn months_legend(area: &Area, looks: &[&Look]) -> Drawn {
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
    for (j, l) in looks.iter().enumerate() {
        let x = c2 + 8 * j as i32;
        area.draw(&Rectangle::new(
            [(x, r1 - 6), (x + 6, r1 + 6)],
            l.rgb.filled(),
        ))?;
        let y = r2 - 4 + 4 * j as i32;
        area.draw(&PathElement::new(
            vec![(c2, y), (c2 + 24, y)],
            l.rgb.stroke_width(2),
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
    let paths: Vec<Vec<(f64, f64)>> = b
        .tracks
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
        .collect();
    let n = b.tracks.first().map_or(0, |t| t.rows.len());
    let (y0, y1) = padded(
        paths.iter().flatten().map(|p| p.1).chain([1.0]),
        0.08,
        false,
    );
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(34)
        .x_label_area_size(46)
        .y_label_area_size(64)
        .build_cartesian_2d(0.0..n.max(1) as f64, y0..y1)?;
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
    if let Some(t) = b.tracks.first() {
        year_ticks(area, &chart, t, (y0, y1), true)?;
    }
    chart.draw_series(DashedLineSeries::new(
        vec![(0.0, 1.0), (n as f64, 1.0)],
        5,
        4,
        MUTED.stroke_width(1),
    ))?;
    let views: Vec<&Look> = b.tracks.iter().map(|t| look(t.model)).collect();
    for (look, path) in views.iter().zip(&paths) {
        chart.draw_series(LineSeries::new(
            path.iter().copied(),
            look.rgb.stroke_width(2),
        ))?;
        for (k, p) in path.iter().enumerate() {
            if k % 12 == 0 || k + 1 == path.len() {
                marker(area, chart.backend_coord(p), look.marker, look.rgb)?;
            }
        }
    }
    look_legend(area, &views, (80, 14))
}

/// A legend of portfolio looks (marker + label), like [`super::charts`]'s legend of views.
fn look_legend(area: &Area, looks: &[&Look], origin: (i32, i32)) -> Drawn {
    let mut x = origin.0;
    for l in looks {
        marker(area, (x + 6, origin.1), l.marker, l.rgb)?;
        area.draw(&Text::new(
            l.label,
            (x + 17, origin.1),
            font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        x += 36 + text_width(l.label, 13.0);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_ray_is_clipped_to_the_plot_box() {
        // y = 0.1 x in the box [3, 6] × [0.25, 0.55]: enters at x = 3 (y = 0.3), leaves at x = 5.5 (y = 0.55).
        let [a, b] = clip_ray(0.1, (3.0, 6.0), (0.25, 0.55)).unwrap();
        assert!((a.0 - 3.0).abs() < 1e-12 && (a.1 - 0.3).abs() < 1e-12);
        assert!((b.0 - 5.5).abs() < 1e-12 && (b.1 - 0.55).abs() < 1e-12);
        assert!(
            clip_ray(1.0, (3.0, 6.0), (0.25, 0.55)).is_none(),
            "a steep ray misses the box"
        );
    }

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
