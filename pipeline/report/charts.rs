//! The pack's charts, one function per chart, drawn as SVG with plotters and embedded by typst.
//!
//! One palette serves every chart and table: the same portfolio always has the same colour and marker.
//! The portfolio colours are our own, chosen to stay apart under the common colour-vision deficiencies by
//! differing in lightness as well as hue (dark charcoal, mid orange, mid blue, light gold); the marker shape
//! carries the same information again, so nothing depends on colour alone. Chart text names the Inter
//! family that the typst world ships, so chart and page type match. Axes say their units.

use super::data::{View, class_order, class_sum};
use super::format;
use crate::error::{Error, Result};
use crate::models::Family;
use crate::run::RunResult;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// The font family of all chart text (shipped in `templates/fonts/`).
pub const FAMILY: &str = "Inter";
/// Width of every chart in SVG pixels; typst scales it to the text width (about 0.25 mm per pixel).
pub(super) const WIDTH: u32 = 680;
pub(super) const INK: RGBColor = RGBColor(0x2b, 0x2f, 0x36);
pub(super) const MUTED: RGBColor = RGBColor(0x6b, 0x71, 0x7a);
pub(super) const GRID: RGBColor = RGBColor(0xe4, 0xe6, 0xe9);

/// A marker shape, drawn the same way in charts and (by name) in the tables' legends.
#[derive(Debug, Clone, Copy)]
pub enum Marker {
    Circle,
    Triangle,
    Square,
    Diamond,
}

/// How one portfolio looks everywhere in the pack.
pub struct Look {
    pub key: &'static str,
    pub label: &'static str,
    pub aim: &'static str,
    pub hex: &'static str,
    pub rgb: RGBColor,
    pub marker: Marker,
    pub marker_name: &'static str,
}

/// The portfolio palette, in report order.
pub const LOOKS: [Look; 4] = [
    Look {
        key: "current",
        label: "Current",
        aim: "holdings at the as-of date",
        hex: "#3b414b",
        rgb: RGBColor(0x3b, 0x41, 0x4b),
        marker: Marker::Circle,
        marker_name: "circle",
    },
    Look {
        key: Family::MaxReturn.name(),
        label: Family::MaxReturn.label(),
        aim: Family::MaxReturn.aim(),
        hex: "#c8621c",
        rgb: RGBColor(0xc8, 0x62, 0x1c),
        marker: Marker::Triangle,
        marker_name: "triangle",
    },
    Look {
        key: Family::MinCvar.name(),
        label: Family::MinCvar.label(),
        aim: Family::MinCvar.aim(),
        hex: "#2c72ad",
        rgb: RGBColor(0x2c, 0x72, 0xad),
        marker: Marker::Square,
        marker_name: "square",
    },
    Look {
        key: Family::MaxRatio.name(),
        label: Family::MaxRatio.label(),
        aim: Family::MaxRatio.aim(),
        hex: "#dba72e",
        rgb: RGBColor(0xdb, 0xa7, 0x2e),
        marker: Marker::Diamond,
        marker_name: "diamond",
    },
];

/// The look of a portfolio key (`current` or a model name).
pub fn look(key: &str) -> &'static Look {
    LOOKS.iter().find(|l| l.key == key).unwrap_or(&LOOKS[0])
}

/// Colours of asset classes in first-seen order, alternating dark and light so neighbours in a stacked bar
/// stay apart; the last one (grey) is for "other".
const CLASS_COLOURS: [RGBColor; 9] = [
    RGBColor(0x1f, 0x4e, 0x79),
    RGBColor(0xf0, 0xbf, 0x7a),
    RGBColor(0xa8, 0x4f, 0x1f),
    RGBColor(0x9d, 0xc4, 0xe3),
    RGBColor(0x5e, 0x48, 0x82),
    RGBColor(0xcf, 0xd8, 0xa0),
    RGBColor(0x2f, 0x86, 0x80),
    RGBColor(0xe6, 0xa3, 0xad),
    RGBColor(0xb8, 0xbc, 0xc2),
];

/// A class colour by position; positions past the palette share the "other" grey.
pub fn class_colour(i: usize) -> RGBColor {
    CLASS_COLOURS[i.min(CLASS_COLOURS.len() - 1)]
}

/// A chart ready for the world: its virtual file name and SVG text.
pub struct Chart {
    pub name: &'static str,
    pub svg: String,
}

/// Every chart of the pack; a chart whose data is missing (no solved portfolio) is left out and the
/// template says so.
pub fn all(r: &RunResult, views: &[View]) -> Result<Vec<Chart>> {
    let solved: Vec<&View> = views
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

/// Height of a grouped bar chart: room for axis and legend plus 8 + 7 pixels per bar and row.
pub(super) fn bars_height(rows: usize, bars: usize) -> u32 {
    (80 + rows * (8 + 7 * bars)) as u32
}

pub(super) type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
pub(super) type Drawn = std::result::Result<(), Box<dyn std::error::Error>>;

/// Runs one chart function on a white canvas of the common width and returns its SVG.
pub(super) fn draw(
    name: &'static str,
    height: u32,
    f: impl FnOnce(&Area) -> Drawn,
) -> Result<Chart> {
    let mut svg = String::new();
    {
        let area = SVGBackend::with_string(&mut svg, (WIDTH, height)).into_drawing_area();
        let run = area
            .fill(&WHITE)
            .map_err(|e| e.into())
            .and_then(|_| f(&area))
            .and_then(|_| area.present().map_err(|e| e.into()));
        run.map_err(|e| Error::Run(format!("chart charts/{name}: {e}")))?;
    }
    Ok(Chart { name, svg })
}

pub(super) fn font(size: f64) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&INK)
}

pub(super) fn muted(size: f64) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&MUTED)
}

/// Decimals of the tick labels of an axis spanning `span` percent: the same for every tick of the axis.
pub(super) fn tick_decimals(span: f64) -> usize {
    if span < 1.5 {
        2
    } else if span < 12.0 {
        1
    } else {
        0
    }
}

pub(super) fn tick(v: f64, decimals: usize) -> String {
    format!("{}%", format::number(v, decimals))
}

/// Lower and upper ends of a value range with `pad` of its width on each side (never empty).
pub(super) fn padded(
    values: impl Iterator<Item = f64>,
    pad: f64,
    include_zero: bool,
) -> (f64, f64) {
    let (mut lo, mut hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    if include_zero {
        lo = lo.min(0.0);
        hi = hi.max(0.0);
    }
    let span = (hi - lo).max(1e-3);
    (lo - pad * span, hi + pad * span)
}

pub(super) fn marker(area: &Area, at: (i32, i32), m: Marker, colour: RGBColor) -> Drawn {
    let style = colour.filled();
    let outline = WHITE.stroke_width(1);
    let (x, y) = at;
    match m {
        Marker::Circle => {
            area.draw(&Circle::new(at, 6, style))?;
            area.draw(&Circle::new(at, 6, outline))?;
        }
        Marker::Square => area.draw(&Rectangle::new([(x - 5, y - 5), (x + 5, y + 5)], style))?,
        Marker::Triangle => area.draw(&Polygon::new(
            vec![(x, y - 7), (x + 7, y + 5), (x - 7, y + 5)],
            style,
        ))?,
        Marker::Diamond => area.draw(&Polygon::new(
            vec![(x, y - 7), (x + 7, y), (x, y + 7), (x - 7, y)],
            style,
        ))?,
    }
    Ok(())
}

/// A one-line legend of portfolios (marker + label) starting at `origin`.
pub(super) fn legend(area: &Area, views: &[&View], origin: (i32, i32)) -> Drawn {
    let mut x = origin.0;
    for v in views {
        marker(area, (x + 6, origin.1), v.look.marker, v.look.rgb)?;
        area.draw(&Text::new(
            v.look.label,
            (x + 17, origin.1),
            font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        x += 36 + text_width(v.look.label, 13.0);
    }
    Ok(())
}

/// Expected return against CVaR at the model level, with the CVaR cap and the return floor.
fn risk_return(area: &Area, r: &RunResult, views: &[&View]) -> Drawn {
    let c = r.config.confidence;
    let pts: Vec<(f64, f64)> = views
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
    for (v, p) in views.iter().zip(&pts) {
        let at = chart.backend_coord(p);
        marker(area, at, v.look.marker, v.look.rgb)?;
        area.draw(&Text::new(
            v.look.label,
            (at.0 + 11, at.1 - 11),
            font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

pub(super) type Cartesian<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// Dashed lines at the CVaR cap (vertical) and the return floor (horizontal), each labelled.
/// The CVaR cap and return floor (in %) worth drawing: only those of a model that was solved, since an
/// unreachable limit would stretch the axes and say nothing about the portfolios shown.
fn limits_to_draw(r: &RunResult) -> (Option<f64>, Option<f64>) {
    let solved = |family: Family| {
        r.models
            .iter()
            .any(|m| m.family == family && super::data::solved(m))
    };
    let cap = Some(r.cvar_cap * 100.0).filter(|v| v.is_finite() && solved(Family::MaxReturn));
    let floor = Some(r.return_floor * 100.0).filter(|v| v.is_finite() && solved(Family::MinCvar));
    (cap, floor)
}

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

/// Horizontal bar layout shared by the bar charts: plot area, x range, and a label per row at the left.
pub(super) fn bar_frame<'a, 'b>(
    area: &'a Area<'b>,
    xs: (f64, f64),
    rows: usize,
    left: u32,
    top: u32,
    desc: &str,
) -> std::result::Result<Cartesian<'a, 'b>, Box<dyn std::error::Error>> {
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .margin_top(top)
        .x_label_area_size(42)
        .y_label_area_size(left)
        .build_cartesian_2d(xs.0..xs.1, 0.0..rows as f64)?;
    let dx = tick_decimals(xs.1 - xs.0);
    chart
        .configure_mesh()
        .disable_y_mesh()
        .y_labels(0)
        .max_light_lines(0)
        .bold_line_style(GRID)
        .axis_style(MUTED)
        .label_style(font(12.0))
        .axis_desc_style(font(12.5))
        .x_label_formatter(&|v| tick(*v, dx))
        .x_desc(desc)
        .draw()?;
    Ok(chart)
}

/// The y coordinate of the point `f` (0 top, 1 bottom) of row `i` of `n`, rows counted from the top.
pub(super) fn ry(n: usize, i: usize, f: f64) -> f64 {
    n as f64 - i as f64 - f
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
fn class_mix(area: &Area, r: &RunResult, views: &[&View]) -> Drawn {
    let classes = class_order(r);
    let xs = (0.0, 100.0);
    let top = 20 + 20 * class_legend_lines(&classes);
    let chart = bar_frame(
        area,
        xs,
        views.len(),
        LEGEND_LEFT as u32,
        top,
        "Weight (% of portfolio value)",
    )?;
    for (i, v) in views.iter().enumerate() {
        let w = v.weights.expect("solved");
        let mut left = 0.0;
        for (j, class) in classes.iter().enumerate() {
            let share = class_sum(r, w, class) * 100.0;
            segment(
                area,
                &chart,
                (left, left + share),
                (i, views.len()),
                class_colour(j),
                j % 2 == 1,
            )?;
            left += share;
        }
        row_label(area, &chart, xs, (i, views.len()), v.look.label)?;
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

/// Estimated width in pixels of `text` set in Inter at `size` (average advance about 0.56 em).
pub(super) fn text_width(text: &str, size: f64) -> i32 {
    (0.56 * size * text.chars().count() as f64).ceil() as i32
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
fn top_holdings(area: &Area, r: &RunResult, views: &[&View], n: usize) -> Drawn {
    let m = r.data.assets.len();
    let weight = |v: &View, i: usize| v.weights.expect("solved")[i] * 100.0;
    let largest = |i: usize| views.iter().map(|v| weight(v, i)).fold(0.0, f64::max);
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| largest(b).total_cmp(&largest(a)).then(a.cmp(&b)));
    order.truncate(n.min(m));
    let mut rows: Vec<Row> = order
        .iter()
        .map(|&i| Row {
            label: r.data.assets[i].clone(),
            values: views.iter().map(|v| weight(v, i)).collect(),
            as_figures: false,
        })
        .collect();
    if m > order.len() {
        let rest = |v: &View| 100.0 - order.iter().map(|&i| weight(v, i)).sum::<f64>();
        rows.push(Row {
            label: format!("Other ({} assets)", m - order.len()),
            values: views.iter().map(|v| rest(v)).collect(),
            as_figures: true,
        });
    }
    grouped_bars(area, views, &rows, "Weight (% of portfolio value)", false)
}

/// One row per label, one thin bar per portfolio in the palette's colours; a legend on top.
fn grouped_bars(area: &Area, views: &[&View], rows: &[Row], desc: &str, zero_line: bool) -> Drawn {
    let (lo, hi) = padded(
        rows.iter()
            .filter(|r| !r.as_figures)
            .flat_map(|r| r.values.iter().copied()),
        0.06,
        true,
    );
    let xs = (if lo < 0.0 { lo } else { 0.0 }, hi);
    let chart = bar_frame(area, xs, rows.len(), 132, 36, desc)?;
    let n = rows.len();
    for (i, row) in rows.iter().enumerate() {
        if row.as_figures {
            figures(area, &chart, views, &row.values, (xs, i, n))?;
        } else {
            bars(area, &chart, views, &row.values, (i, n))?;
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
    legend(area, views, (132, 14))
}

pub(super) fn bars(
    area: &Area,
    chart: &Cartesian,
    views: &[&View],
    values: &[f64],
    (i, n): (usize, usize),
) -> Drawn {
    let k = views.len() as f64;
    for (j, (v, x)) in views.iter().zip(values).enumerate() {
        let y0 = 0.1 + 0.8 * j as f64 / k;
        let (a, b) = (
            chart.backend_coord(&(0.0, ry(n, i, y0))),
            chart.backend_coord(&(*x, ry(n, i, y0 + 0.8 / k))),
        );
        area.draw(&Rectangle::new([a, b], v.look.rgb.filled()))?;
    }
    Ok(())
}

/// A row's values as marker + figure pairs spread along the row.
fn figures(
    area: &Area,
    chart: &Cartesian,
    views: &[&View],
    values: &[f64],
    (xs, i, n): ((f64, f64), usize, usize),
) -> Drawn {
    let (left, y) = chart.backend_coord(&(xs.0, ry(n, i, 0.5)));
    for (j, (v, x)) in views.iter().zip(values).enumerate() {
        let at = (left + 12 + 110 * j as i32, y);
        marker(area, (at.0 + 6, at.1), v.look.marker, v.look.rgb)?;
        area.draw(&Text::new(
            format::pct(*x / 100.0, format::Style::Weight),
            (at.0 + 17, at.1),
            font(12.5).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

/// Probability of a loss larger than each level, over the worst quarter of scenarios, per portfolio; the
/// model's tail probability 1 − c is marked, so each curve crosses it at that portfolio's VaR.
fn tail_curve(area: &Area, r: &RunResult, views: &[&View]) -> Drawn {
    let c = r.config.confidence;
    let reach = (3.0 * (1.0 - c)).clamp(0.1, 0.5);
    let curves: Vec<Vec<(f64, f64)>> = views
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
    for (v, pts) in views.iter().zip(&curves) {
        chart.draw_series(LineSeries::new(
            pts.iter().copied(),
            v.look.rgb.stroke_width(2),
        ))?;
        if let Some(last) = pts.last() {
            marker(area, chart.backend_coord(last), v.look.marker, v.look.rgb)?;
        }
    }
    legend(area, views, (80, 14))
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
fn cvar_by_class(area: &Area, r: &RunResult, views: &[&View]) -> Drawn {
    let rows: Vec<Row> = class_order(r)
        .iter()
        .map(|class| Row {
            label: format::title(class),
            values: views
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
    grouped_bars(area, views, &rows, &desc, true)
}
