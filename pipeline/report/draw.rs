//! The chart kit every chart of the pack is drawn with (plotters, SVG backend): the canvas and its width,
//! type, ink colours, axis ticks, markers, portfolio legends and horizontal bar frames, and the colours of
//! asset classes.
//!
//! Chart text names the Inter family that the typst world ships, so chart and page type match; axes say
//! their units. Portfolio colours and markers come from the view model ([`super::view::Identity`]).
//!
//! May read: the view model and [`super::format`]. Draws nothing on its own.

use super::format;
use super::view::{Identity, Marker};
use crate::error::{Error, Result};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// The font family of all chart text (shipped in `templates/fonts/`).
pub const FAMILY: &str = "Inter";
/// Width of every chart in SVG pixels; typst scales it to the text width (about 0.25 mm per pixel).
pub const WIDTH: u32 = 680;
pub const INK: RGBColor = RGBColor(0x2b, 0x2f, 0x36);
pub const MUTED: RGBColor = RGBColor(0x6b, 0x71, 0x7a);
pub const GRID: RGBColor = RGBColor(0xe4, 0xe6, 0xe9);

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

/// A portfolio's colour for drawing.
pub fn colour(id: &Identity) -> RGBColor {
    let [r, g, b] = id.rgb;
    RGBColor(r, g, b)
}

/// A chart ready for the world: its virtual file name and SVG text.
pub struct Chart {
    pub name: &'static str,
    pub svg: String,
}

pub type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
pub type Drawn = std::result::Result<(), Box<dyn std::error::Error>>;
pub type Cartesian<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// Runs one chart function on a white canvas of the common width and returns its SVG.
pub fn draw(name: &'static str, height: u32, f: impl FnOnce(&Area) -> Drawn) -> Result<Chart> {
    let mut svg = String::new();
    {
        let area = SVGBackend::with_string(&mut svg, (WIDTH, height)).into_drawing_area();
        let run = area
            .fill(&WHITE)
            .map_err(|e| e.into())
            .and_then(|_| f(&area))
            .and_then(|_| area.present().map_err(|e| e.into()));
        run.map_err(|e| Error::Chart {
            name: name.to_string(),
            message: e.to_string(),
        })?;
    }
    Ok(Chart { name, svg })
}

/// Height of a grouped bar chart: room for axis and legend plus 8 + 7 pixels per bar and row.
pub fn bars_height(rows: usize, bars: usize) -> u32 {
    (80 + rows * (8 + 7 * bars)) as u32
}

pub fn font(size: f64) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&INK)
}

pub fn muted(size: f64) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&MUTED)
}

/// Estimated width in pixels of `text` set in Inter at `size` (average advance about 0.56 em).
pub fn text_width(text: &str, size: f64) -> i32 {
    (0.56 * size * text.chars().count() as f64).ceil() as i32
}

/// Decimals of the tick labels of an axis spanning `span` percent: the same for every tick of the axis.
pub fn tick_decimals(span: f64) -> usize {
    if span < 1.5 {
        2
    } else if span < 12.0 {
        1
    } else {
        0
    }
}

pub fn tick(v: f64, decimals: usize) -> String {
    format!("{}%", format::number(v, decimals))
}

/// Lower and upper ends of a value range with `pad` of its width on each side (never empty).
pub fn padded(values: impl Iterator<Item = f64>, pad: f64, include_zero: bool) -> (f64, f64) {
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

pub fn marker(area: &Area, at: (i32, i32), m: Marker, colour: RGBColor) -> Drawn {
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

/// A portfolio's marker in its colour.
pub fn mark(area: &Area, at: (i32, i32), id: &Identity) -> Drawn {
    marker(area, at, id.marker, colour(id))
}

/// A one-line legend of portfolios (marker + label) starting at `origin`.
pub fn legend(area: &Area, ids: &[&Identity], origin: (i32, i32)) -> Drawn {
    let mut x = origin.0;
    for id in ids {
        mark(area, (x + 6, origin.1), id)?;
        area.draw(&Text::new(
            id.label,
            (x + 17, origin.1),
            font(13.0).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        x += 36 + text_width(id.label, 13.0);
    }
    Ok(())
}

/// Horizontal bar layout shared by the bar charts: plot area, x range, and a label per row at the left.
pub fn bar_frame<'a, 'b>(
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
pub fn ry(n: usize, i: usize, f: f64) -> f64 {
    n as f64 - i as f64 - f
}

/// One thin bar per portfolio in row `i` of `n`, each in the portfolio's colour.
pub fn bars(
    area: &Area,
    chart: &Cartesian,
    ids: &[&Identity],
    values: &[f64],
    (i, n): (usize, usize),
) -> Drawn {
    let k = ids.len() as f64;
    for (j, (id, x)) in ids.iter().zip(values).enumerate() {
        let y0 = 0.1 + 0.8 * j as f64 / k;
        let (a, b) = (
            chart.backend_coord(&(0.0, ry(n, i, y0))),
            chart.backend_coord(&(*x, ry(n, i, y0 + 0.8 / k))),
        );
        area.draw(&Rectangle::new([a, b], colour(id).filled()))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_chart_that_cannot_be_drawn_is_a_chart_error_naming_it() {
        let e = match draw("broken.svg", 100, |_| Err("no room for the legend".into())) {
            Err(e) => e,
            Ok(_) => panic!("a failing chart function must fail the chart"),
        };
        assert!(
            matches!(&e, Error::Chart { name, .. } if name == "broken.svg"),
            "{e:?}"
        );
        assert_eq!(
            e.to_string(),
            "chart charts/broken.svg: no room for the legend"
        );
        assert_eq!(e.exit_code(), crate::error::EXIT_FAILURE);
    }
}
