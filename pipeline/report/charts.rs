//! The charts of the summary and allocation sections, one function per chart: risk against return, the
//! class mix, the largest holdings, the tail curve and CVaR by class. Drawn with the chart kit
//! ([`super::draw`]) in the portfolios' colours and markers ([`super::view`]); the "Further analysis"
//! charts live with their section ([`super::further`]).
//!
//! May read: the [`RunResult`], the view model, [`super::format`] and the chart kit.

use super::draw::{
    Area, Cartesian, Chart, Drawn, FAMILY, GRID, INK, MUTED, WIDTH, bar_frame, bars, bars_height,
    class_colour, colour, draw, font, legend, mark, muted, padded, ry, text_width, tick,
    tick_decimals,
};
use super::format;
use super::view::{Identity, Portfolio, class_order, class_sum, solved};
use crate::error::Result;
use crate::models::Family;
use crate::run::RunResult;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// The charts of the summary and allocation sections; a chart whose data is missing (no solved portfolio)
/// is left out and the template says so.
pub fn all(r: &RunResult, shown: &[Portfolio]) -> Result<Vec<Chart>> {
    let solved: Vec<&Portfolio> = shown
        .iter()
        .filter(|v| v.profile.is_some() && v.weights.is_some())
        .collect();
    if solved.is_empty() {
        return Ok(vec![]);
    }
    Ok(vec![
        draw("risk-return.svg", 300, |a| risk_return(a, r, &solved))?,
        draw(
            "class-mix.svg",
            50 + 20 * class_legend_lines(&class_order(r)) + 34 * solved.len() as u32,
            |a| class_mix(a, r, &solved),
        )?,
        draw(
            "top-holdings.svg",
            bars_height(TOP_HOLDINGS.min(r.data.assets.len()) + 1, solved.len()),
            |a| top_holdings(a, r, &solved, TOP_HOLDINGS),
        )?,
        draw("tail-curve.svg", 300, |a| tail_curve(a, r, &solved))?,
        draw(
            "cvar-by-class.svg",
            bars_height(class_order(r).len(), solved.len()),
            |a| cvar_by_class(a, r, &solved),
        )?,
    ])
}

/// How many assets the holdings chart shows before it sums the rest as "other".
pub const TOP_HOLDINGS: usize = 10;

/// Expected return against CVaR at the model level, with the CVaR cap and the return floor.
fn risk_return(area: &Area, r: &RunResult, shown: &[&Portfolio]) -> Drawn {
    let c = r.config.confidence;
    let pts: Vec<(f64, f64)> = shown
        .iter()
        .map(|v| {
            v.profile
                .map(|p| (p.at(c).cvar * 100.0, p.expected_return * 100.0))
                .unwrap()
        })
        .collect();
    let (cap, floor) = limits_to_draw(r);
    let (x0, x1) = padded(pts.iter().map(|p| p.0).chain(cap), 0.15, false);
    let (y0, y1) = padded(pts.iter().map(|p| p.1).chain(floor), 0.2, false);
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(18)
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
            "CVaR {} over one horizon (% of portfolio value)",
            format::level(c)
        ))
        .y_desc("Expected return over one horizon (%)")
        .draw()?;
    reference_lines(area, &mut chart, (cap, floor), (x0, x1), (y0, y1))?;
    for (v, p) in shown.iter().zip(&pts) {
        let at = chart.backend_coord(p);
        mark(area, at, v.identity)?;
        area.draw(&Text::new(
            v.identity.label,
            (at.0 + 11, at.1 - 11),
            font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// The CVaR cap and return floor (in %) worth drawing: only those of a model that was solved, since an
/// unreachable limit would stretch the axes and say nothing about the portfolios shown.
fn limits_to_draw(r: &RunResult) -> (Option<f64>, Option<f64>) {
    let solved = |family: Family| r.models.iter().any(|m| m.family == family && solved(m));
    let cap = Some(r.cvar_cap * 100.0).filter(|v| v.is_finite() && solved(Family::MaxReturn));
    let floor = Some(r.return_floor * 100.0).filter(|v| v.is_finite() && solved(Family::MinCvar));
    (cap, floor)
}

/// Dashed lines at the CVaR cap (vertical) and the return floor (horizontal), each labelled.
fn reference_lines(
    area: &Area,
    chart: &mut Cartesian,
    (cap, floor): (Option<f64>, Option<f64>),
    xs: (f64, f64),
    ys: (f64, f64),
) -> Drawn {
    let dash = MUTED.stroke_width(1);
    if let Some(x) = cap {
        chart.draw_series(DashedLineSeries::new(
            vec![(x, ys.0), (x, ys.1)],
            5,
            4,
            dash,
        ))?;
        let at = chart.backend_coord(&(x, ys.1));
        area.draw(&Text::new(
            "CVaR cap",
            (at.0 - 5, at.1 + 4),
            muted(11.5).pos(Pos::new(HPos::Right, VPos::Top)),
        ))?;
    }
    if let Some(y) = floor {
        chart.draw_series(DashedLineSeries::new(
            vec![(xs.0, y), (xs.1, y)],
            5,
            4,
            dash,
        ))?;
        let at = chart.backend_coord(&(xs.0, y));
        area.draw(&Text::new(
            "return floor",
            (at.0 + 6, at.1 - 4),
            muted(11.5).pos(Pos::new(HPos::Left, VPos::Bottom)),
        ))?;
    }
    Ok(())
}

/// A row label right-aligned against the plot's left edge, at the middle of row `i` of `n`.
fn row_label(
    area: &Area,
    chart: &Cartesian,
    xs: (f64, f64),
    (i, n): (usize, usize),
    text: &str,
) -> Drawn {
    let (px, py) = chart.backend_coord(&(xs.0, ry(n, i, 0.5)));
    area.draw(&Text::new(
        text.to_string(),
        (px - 8, py),
        font(12.5).pos(Pos::new(HPos::Right, VPos::Center)),
    ))?;
    Ok(())
}

/// Weight by asset class, one stacked bar per portfolio; segments of 8% or more carry their figure.
fn class_mix(area: &Area, r: &RunResult, shown: &[&Portfolio]) -> Drawn {
    let classes = class_order(r);
    let xs = (0.0, 100.0);
    let top = 20 + 20 * class_legend_lines(&classes);
    let chart = bar_frame(
        area,
        xs,
        shown.len(),
        LEGEND_LEFT as u32,
        top,
        "Weight (% of portfolio value)",
    )?;
    for (i, v) in shown.iter().enumerate() {
        let w = v.weights.expect("solved");
        let mut left = 0.0;
        for (j, class) in classes.iter().enumerate() {
            let share = class_sum(r, w, class) * 100.0;
            segment(
                area,
                &chart,
                (left, left + share),
                (i, shown.len()),
                class_colour(j),
                j % 2 == 1,
            )?;
            left += share;
        }
        row_label(area, &chart, xs, (i, shown.len()), v.identity.label)?;
    }
    class_legend(area, &classes, (LEGEND_LEFT, 14))
}

fn segment(
    area: &Area,
    chart: &Cartesian,
    span: (f64, f64),
    (row, n): (usize, usize),
    colour: RGBColor,
    light: bool,
) -> Drawn {
    let (a, b) = (
        chart.backend_coord(&(span.0, ry(n, row, 0.18))),
        chart.backend_coord(&(span.1, ry(n, row, 0.82))),
    );
    area.draw(&Rectangle::new([a, b], colour.filled()))?;
    area.draw(&Rectangle::new([a, b], WHITE.stroke_width(1)))?;
    if span.1 - span.0 >= 8.0 {
        let text = format::pct((span.1 - span.0) / 100.0, format::Style::Weight);
        let style = (FAMILY, 11.5)
            .into_font()
            .color(if light { &INK } else { &WHITE });
        area.draw(&Text::new(
            text,
            ((a.0 + b.0) / 2, (a.1 + b.1) / 2),
            style.pos(Pos::new(HPos::Center, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// Where each class's legend entry goes, wrapping onto further lines of 20 pixels when a line is full.
fn class_legend_layout(classes: &[String], origin: (i32, i32)) -> Vec<(String, (i32, i32))> {
    let (mut x, mut y) = origin;
    classes
        .iter()
        .map(|class| {
            let label = format::title(class);
            let width = 28 + text_width(&label, 12.0);
            if x + width > WIDTH as i32 - 8 {
                (x, y) = (origin.0, y + 20);
            }
            let at = (x, y);
            x += width;
            (label, at)
        })
        .collect()
}

/// Lines the class legend needs.
fn class_legend_lines(classes: &[String]) -> u32 {
    let layout = class_legend_layout(classes, (LEGEND_LEFT, 0));
    layout.last().map_or(1, |(_, (_, y))| 1 + (*y / 20) as u32)
}

const LEGEND_LEFT: i32 = 96;

fn class_legend(area: &Area, classes: &[String], origin: (i32, i32)) -> Drawn {
    for (j, (label, (x, y))) in class_legend_layout(classes, origin).into_iter().enumerate() {
        area.draw(&Rectangle::new(
            [(x, y - 6), (x + 12, y + 6)],
            class_colour(j).filled(),
        ))?;
        area.draw(&Text::new(
            label,
            (x + 17, y),
            font(12.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// One row of a grouped bar chart: a label and one value per portfolio, drawn as bars or, for a row whose
/// values would crush the scale (the "other" holdings), written out as figures.
struct Row {
    label: String,
    values: Vec<f64>,
    as_figures: bool,
}

/// The `n` assets with the largest weight in any portfolio, one bar per portfolio; the rest summed as
/// "Other", written as figures so that the scale stays readable for the named holdings.
fn top_holdings(area: &Area, r: &RunResult, shown: &[&Portfolio], n: usize) -> Drawn {
    let m = r.data.assets.len();
    let weight = |v: &Portfolio, i: usize| v.weights.expect("solved")[i] * 100.0;
    let largest = |i: usize| shown.iter().map(|v| weight(v, i)).fold(0.0, f64::max);
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| largest(b).total_cmp(&largest(a)).then(a.cmp(&b)));
    order.truncate(n.min(m));
    let mut rows: Vec<Row> = order
        .iter()
        .map(|&i| Row {
            label: r.data.assets[i].clone(),
            values: shown.iter().map(|v| weight(v, i)).collect(),
            as_figures: false,
        })
        .collect();
    if m > order.len() {
        let rest = |v: &Portfolio| 100.0 - order.iter().map(|&i| weight(v, i)).sum::<f64>();
        rows.push(Row {
            label: format!("Other ({} assets)", m - order.len()),
            values: shown.iter().map(|v| rest(v)).collect(),
            as_figures: true,
        });
    }
    grouped_bars(area, shown, &rows, "Weight (% of portfolio value)", false)
}

/// One row per label, one thin bar per portfolio in the palette's colours; a legend on top.
fn grouped_bars(
    area: &Area,
    shown: &[&Portfolio],
    rows: &[Row],
    desc: &str,
    zero_line: bool,
) -> Drawn {
    let (lo, hi) = padded(
        rows.iter()
            .filter(|r| !r.as_figures)
            .flat_map(|r| r.values.iter().copied()),
        0.06,
        true,
    );
    let xs = (if lo < 0.0 { lo } else { 0.0 }, hi);
    let chart = bar_frame(area, xs, rows.len(), 132, 36, desc)?;
    let ids = identities(shown);
    let n = rows.len();
    for (i, row) in rows.iter().enumerate() {
        if row.as_figures {
            figures(area, &chart, shown, &row.values, (xs, i, n))?;
        } else {
            bars(area, &chart, &ids, &row.values, (i, n))?;
        }
        row_label(area, &chart, xs, (i, n), &row.label)?;
    }
    if zero_line {
        let (a, b) = (
            chart.backend_coord(&(0.0, 0.0)),
            chart.backend_coord(&(0.0, n as f64)),
        );
        area.draw(&PathElement::new(vec![a, b], INK.stroke_width(1)))?;
    }
    legend(area, &ids, (132, 14))
}

/// A row's values as marker + figure pairs spread along the row.
fn figures(
    area: &Area,
    chart: &Cartesian,
    shown: &[&Portfolio],
    values: &[f64],
    (xs, i, n): ((f64, f64), usize, usize),
) -> Drawn {
    let (left, y) = chart.backend_coord(&(xs.0, ry(n, i, 0.5)));
    for (j, (v, x)) in shown.iter().zip(values).enumerate() {
        let at = (left + 12 + 110 * j as i32, y);
        mark(area, (at.0 + 6, at.1), v.identity)?;
        area.draw(&Text::new(
            format::pct(*x / 100.0, format::Style::Weight),
            (at.0 + 17, at.1),
            font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// The identities of the portfolios shown, in the same order.
fn identities<'a>(shown: &[&Portfolio<'a>]) -> Vec<&'static Identity> {
    shown.iter().map(|v| v.identity).collect()
}

/// Probability of a loss larger than each level, over the worst quarter of scenarios, per portfolio; the
/// model's tail probability 1 − c is marked, so each curve crosses it at that portfolio's VaR.
fn tail_curve(area: &Area, r: &RunResult, shown: &[&Portfolio]) -> Drawn {
    let c = r.config.confidence;
    let reach = (3.0 * (1.0 - c)).clamp(0.1, 0.5);
    let curves: Vec<Vec<(f64, f64)>> = shown
        .iter()
        .map(|v| exceedance(r, v.weights.unwrap(), reach))
        .collect();
    let (x0, x1) = padded(curves.iter().flatten().map(|p| p.0), 0.04, false);
    let y1 = reach * 100.0;
    let mut chart = ChartBuilder::on(area)
        .margin(14)
        .margin_top(34)
        .x_label_area_size(46)
        .y_label_area_size(64)
        .build_cartesian_2d(x0..x1, 0.0..y1)?;
    let (dx, dy) = (tick_decimals(x1 - x0), tick_decimals(y1));
    chart
        .configure_mesh()
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.5))
        .x_label_formatter(&|v| tick(*v, dx))
        .y_label_formatter(&|v| tick(*v, dy))
        .x_desc("Loss over one horizon (% of portfolio value)")
        .y_desc("Probability of a larger loss (%)")
        .draw()?;
    let t = (1.0 - c) * 100.0;
    chart.draw_series(DashedLineSeries::new(
        vec![(x0, t), (x1, t)],
        5,
        4,
        MUTED.stroke_width(1),
    ))?;
    let at = chart.backend_coord(&(x1, t));
    area.draw(&Text::new(
        format!("{} tail", format::level(1.0 - c)),
        (at.0 - 6, at.1 - 4),
        muted(11.5).pos(Pos::new(HPos::Right, VPos::Bottom)),
    ))?;
    for (v, pts) in shown.iter().zip(&curves) {
        chart.draw_series(LineSeries::new(
            pts.iter().copied(),
            colour(v.identity).stroke_width(2),
        ))?;
        if let Some(last) = pts.last() {
            mark(area, chart.backend_coord(last), v.identity)?;
        }
    }
    legend(area, &identities(shown), (80, 14))
}

/// Points (loss %, P(L ≥ loss) %) of a step curve over the largest losses up to probability `reach`.
fn exceedance(r: &RunResult, w: &[f64], reach: f64) -> Vec<(f64, f64)> {
    let s = &r.scenarios;
    let mut losses: Vec<(f64, f64)> = s
        .portfolio_returns(w)
        .iter()
        .zip(&s.probabilities)
        .map(|(ret, p)| (-ret, *p))
        .collect();
    losses.sort_by(|a, b| b.0.total_cmp(&a.0));
    let mut out = Vec::new();
    let mut cum = 0.0;
    for (loss, p) in losses {
        if cum + p > reach + 1e-12 {
            break;
        }
        out.push((loss * 100.0, cum * 100.0));
        cum += p;
        out.push((loss * 100.0, cum * 100.0));
    }
    out.reverse();
    out
}

/// CVaR contribution of each asset class, one bar per portfolio; negative bars are classes that lower it.
fn cvar_by_class(area: &Area, r: &RunResult, shown: &[&Portfolio]) -> Drawn {
    let rows: Vec<Row> = class_order(r)
        .iter()
        .map(|class| Row {
            label: format::title(class),
            values: shown
                .iter()
                .map(|v| class_sum(r, &v.profile.unwrap().component_cvar, class) * 100.0)
                .collect(),
            as_figures: false,
        })
        .collect();
    let desc = format!(
        "Contribution to CVaR {} (% of portfolio value)",
        format::level(r.config.confidence)
    );
    grouped_bars(area, shown, &rows, &desc, true)
}
